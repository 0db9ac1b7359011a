//! `cairn synth --spec FILE`: the file is read strictly (an unknown field or an injection
//! record is refused in one sentence), and it makes its map again byte for byte.

#[path = "common/cli.rs"]
mod cli;

use cli::{cairn, check_refused, listing};
use serde_json::{Value, json};
use std::path::{Path, PathBuf};

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("demo-maps")
        .join(name)
}

fn column_spec() -> PathBuf {
    demo("velloran-column-spec.json")
}

fn emission_spec() -> PathBuf {
    demo("velloran-850um-spec.json")
}

fn read_json(path: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// Runs `synth --spec SPEC -o out EXTRA` in a fresh folder; the written specification and
/// the standard error.
fn refine(spec: &Path, extra: &[&str]) -> (Value, String) {
    let dir = tempfile::tempdir().unwrap();
    let mut args = vec!["synth", "-o", "out", "-q", "--spec", spec.to_str().unwrap()];
    args.extend_from_slice(extra);
    let o = cairn(&args, dir.path());
    assert_eq!(o.code, 0, "{args:?}: {}", o.stderr);
    (read_json(&dir.path().join("out/synth-spec.json")), o.stderr)
}

#[test]
fn the_demo_specs_make_the_demo_maps_again_byte_for_byte() {
    let dir = tempfile::tempdir().unwrap();
    for name in ["velloran-column", "velloran-850um"] {
        let spec = demo(&format!("{name}-spec.json"));
        let o = cairn(
            &[
                "synth",
                "-q",
                "-o",
                "again",
                "--name",
                name,
                "--spec",
                spec.to_str().unwrap(),
            ],
            dir.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        for suffix in [".fits", "-truth.csv", "-spec.json"] {
            let f = format!("{name}{suffix}");
            assert!(
                std::fs::read(dir.path().join("again").join(&f)).unwrap()
                    == std::fs::read(demo(&f)).unwrap(),
                "{f} differs from the stored demo file"
            );
        }
    }
}

/// A refusal: exit 2, one sentence naming `names` and saying `says`, and nothing in the
/// folder but the files that were there.
fn refused(dir: &Path, extra: &[&str], names: &str, says: &str) {
    let before = listing(dir);
    let mut args = vec!["synth", "-o", "out"];
    args.extend_from_slice(extra);
    let o = cairn(&args, dir);
    check_refused(&o, &args, names, says);
    assert_eq!(listing(dir), before, "{args:?}: nothing written");
}

#[test]
fn an_injection_record_is_refused_with_how_to_redo_it() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let map = demo("velloran-column.fits");
    let o = cairn(
        &[
            "synth",
            "-q",
            "--into",
            map.to_str().unwrap(),
            "-o",
            "inj",
            "--distance",
            "410pc",
            "--cores",
            "3",
            "--seed",
            "1",
        ],
        d,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    refused(
        d,
        &["--spec", "inj/synth-spec.json"],
        "inj/synth-spec.json",
        "cannot be replayed with --spec; run the same cairn synth --into command again",
    );
    // The map it was made from is named.
    let o = cairn(&["synth", "-o", "out", "--spec", "inj/synth-spec.json"], d);
    assert!(o.stderr.contains("velloran-column.fits"), "{}", o.stderr);
}

#[test]
fn unknown_fields_are_refused_with_their_name_and_line() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let mut base = read_json(&emission_spec());
    base["cores"] = json!([{"x": 100.0, "y": 100.0, "mass_msun": 3.0, "radius_pc": 0.04,
        "profile": {"bonnor_ebert": {"xi_max": 6.45}}}]);
    // Where the field is put, its name, and what the sentence says to do.
    let cases: [(&str, &str, &str); 8] = [
        ("", "mu_H2", "write it `mu_h2`"),
        ("/population", "Margin_px", "write it `margin_px`"),
        ("/background", "sigma", "`sigma_ln`"),
        ("/output/dust_emission", "temperature", "`temperature_k`"),
        ("/output/dust_emission/opacity", "betta", "`beta`"),
        ("/cores/0", "mass", "`mass_msun`"),
        ("/cores/0/profile/bonnor_ebert", "xi", "`xi_max`"),
        ("", "noise", "`noise_rms`"),
    ];
    for (at, field, says) in cases {
        let mut spec = base.clone();
        spec.pointer_mut(at).unwrap()[field] = json!(2.33);
        std::fs::write(
            d.join("typo.json"),
            serde_json::to_string_pretty(&spec).unwrap(),
        )
        .unwrap();
        refused(
            d,
            &["--spec", "typo.json"],
            "typo.json",
            &format!("has the field `{field}` at line"),
        );
        let o = cairn(&["synth", "-o", "out", "--spec", "typo.json"], d);
        assert!(o.stderr.contains(says), "{field}: {}", o.stderr);
    }
    // Spelt right, the same value is taken.
    let mut spec = read_json(&column_spec());
    spec["mu_h2"] = json!(2.33);
    std::fs::write(d.join("mu.json"), spec.to_string()).unwrap();
    let (after, _) = refine(&d.join("mu.json"), &[]);
    assert_eq!(after["mu_h2"], json!(2.33));
}

#[test]
fn the_emission_unit_is_read_in_every_spelling_and_written_as_before() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let text = std::fs::read_to_string(emission_spec()).unwrap();
    assert!(text.contains("\"JyPerBeam\""));
    for spelling in ["jy_per_beam", "Jy/beam"] {
        std::fs::write(
            d.join("unit.json"),
            text.replace("\"JyPerBeam\"", &format!("\"{spelling}\"")),
        )
        .unwrap();
        let _ = std::fs::remove_dir_all(d.join("out"));
        let o = cairn(&["synth", "-q", "-o", "out", "--spec", "unit.json"], d);
        assert_eq!(o.code, 0, "{spelling}: {}", o.stderr);
        assert!(
            std::fs::read(d.join("out/synth.fits")).unwrap()
                == std::fs::read(demo("velloran-850um.fits")).unwrap(),
            "{spelling}: the map differs from the demo map"
        );
        assert_eq!(
            std::fs::read_to_string(d.join("out/synth-spec.json")).unwrap(),
            text,
            "{spelling}: the spec is written as before"
        );
    }
    // MJy/sr in snake case too.
    let (after, _) = {
        std::fs::write(
            d.join("mjy.json"),
            text.replace("\"JyPerBeam\"", "\"mjy_per_sr\""),
        )
        .unwrap();
        refine(&d.join("mjy.json"), &[])
    };
    assert_eq!(after["output"]["dust_emission"]["unit"], json!("MJyPerSr"));
}

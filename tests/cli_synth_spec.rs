//! `cairn synth --spec FILE`: the file is read strictly (an unknown field or an injection
//! record is refused in one sentence), it makes its map again byte for byte, and every other
//! option given changes its own field of the specification and nothing else; an option that
//! applies to nothing in the map is refused, with nothing written.

#[path = "common/cli.rs"]
mod cli;

use cli::{cairn, check_refused, listing};
use serde_json::{Value, json};
use std::collections::BTreeMap;
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

/// Every leaf of a JSON document by its JSON pointer (an object or list that is empty is a
/// leaf of its own, so that `"cores": []` is compared too).
fn flatten(v: &Value, at: &str, out: &mut BTreeMap<String, Value>) {
    match v {
        Value::Object(m) if !m.is_empty() => {
            for (k, x) in m {
                flatten(x, &format!("{at}/{k}"), out);
            }
        }
        Value::Array(a) if !a.is_empty() => {
            for (i, x) in a.iter().enumerate() {
                flatten(x, &format!("{at}/{i}"), out);
            }
        }
        _ => {
            out.insert(at.to_string(), v.clone());
        }
    }
}

fn leaves(v: &Value) -> BTreeMap<String, Value> {
    let mut out = BTreeMap::new();
    flatten(v, "", &mut out);
    out
}

/// The leaves that differ between two documents: pointer, value before, value after (`None`
/// where the leaf is absent).
fn differences(before: &Value, after: &Value) -> BTreeMap<String, (Option<Value>, Option<Value>)> {
    let (b, a) = (leaves(before), leaves(after));
    b.keys()
        .chain(a.keys())
        .filter(|k| b.get(*k) != a.get(*k))
        .map(|k| (k.clone(), (b.get(k).cloned(), a.get(k).cloned())))
        .collect()
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

/// The margin the README gives random cores: the widest core's reach, four standard
/// deviations of a Gaussian core (its radius a half width at half maximum) convolved with
/// the beam, or a Bonnor-Ebert core's outer radius plus four of the beam's, rounded up, at
/// least 10 pixels. Pixel size at the distance by the small-angle approximation.
fn readme_margin(
    distance_pc: f64,
    pixel_arcsec: f64,
    beam_arcsec: f64,
    radius_pc: f64,
    be: bool,
) -> f64 {
    let pixel_pc = distance_pc * pixel_arcsec * std::f64::consts::PI / (180.0 * 3600.0);
    let r_px = radius_pc / pixel_pc;
    let sigma_beam = beam_arcsec / pixel_arcsec / (8.0 * 2f64.ln()).sqrt();
    let reach = if be {
        r_px + 4.0 * sigma_beam
    } else {
        4.0 * (r_px / (2.0 * 2f64.ln()).sqrt()).hypot(sigma_beam)
    };
    reach.ceil().max(10.0)
}

/// Asserts that `extra` on `spec` changed exactly the leaves `expected` (pointer and new
/// value, `Value::Null` for a leaf removed) and kept every other one.
fn changes_exactly(spec: &Path, extra: &[&str], expected: &[(&str, Value)]) {
    let before = read_json(spec);
    let (after, stderr) = refine(spec, extra);
    let diff = differences(&before, &after);
    let want: BTreeMap<String, Value> = expected
        .iter()
        .map(|(k, v)| (k.to_string(), v.clone()))
        .collect();
    assert_eq!(
        diff.keys().collect::<Vec<_>>(),
        want.keys().collect::<Vec<_>>(),
        "{extra:?} on {}: fields changed {diff:?} (stderr {stderr})",
        spec.display()
    );
    for (k, (_, now)) in &diff {
        assert_eq!(
            now.clone().unwrap_or(Value::Null),
            want[k],
            "{extra:?}: {k}"
        );
    }
}

#[test]
fn each_option_changes_only_its_own_field_of_an_emission_spec() {
    let s = emission_spec();
    let em = "/output/dust_emission";
    changes_exactly(
        &s,
        &["--temperature", "20K"],
        &[(&format!("{em}/temperature_k"), json!(20.0))],
    );
    changes_exactly(
        &s,
        &["--beta", "1.5"],
        &[(&format!("{em}/opacity/beta"), json!(1.5))],
    );
    changes_exactly(
        &s,
        &["--opacity", "0.2cm2/g"],
        &[(&format!("{em}/opacity/kappa0_cm2_per_g"), json!(0.2))],
    );
    // The wavelength alone: the temperature, unit, opacity and the noise (still Jy/beam) stay.
    changes_exactly(
        &s,
        &["--emission", "450um"],
        &[(&format!("{em}/wavelength_um"), json!(450.0))],
    );
    // A change of unit with the noise given in the new unit.
    changes_exactly(
        &s,
        &[
            "--beta",
            "1.5",
            "--emission-unit",
            "MJy/sr",
            "--noise",
            "0.05",
        ],
        &[
            (&format!("{em}/opacity/beta"), json!(1.5)),
            (&format!("{em}/unit"), json!("MJyPerSr")),
            ("/noise_rms", json!(0.05)),
        ],
    );
    changes_exactly(&s, &["--seed", "5"], &[("/seed", json!(5))]);
}

#[test]
fn each_option_changes_only_its_own_field_of_a_column_density_spec() {
    let s = column_spec();
    // The demo cloud: 410 pc, 6" pixels, 18.2" beam, cores up to 0.07 pc.
    assert_eq!(readme_margin(410.0, 6.0, 18.2, 0.07, false), 21.0);
    let p = "/population";
    changes_exactly(
        &s,
        &["--cores", "10", "--seed", "5"],
        &[(&format!("{p}/count"), json!(10)), ("/seed", json!(5))],
    );
    changes_exactly(
        &s,
        &["--core-mass", "1Msun,10Msun"],
        &[
            (&format!("{p}/mass_min_msun"), json!(1.0)),
            (&format!("{p}/mass_max_msun"), json!(10.0)),
        ],
    );
    changes_exactly(
        &s,
        &["--core-mass-index", "1.8"],
        &[(&format!("{p}/mass_index"), json!(1.8))],
    );
    // The widest radius sets the margin, which was the default and is recomputed.
    changes_exactly(
        &s,
        &["--core-radius", "0.02pc,0.05pc"],
        &[
            (&format!("{p}/radius_max_pc"), json!(0.05)),
            (
                &format!("{p}/margin_px"),
                json!(readme_margin(410.0, 6.0, 18.2, 0.05, false)),
            ),
        ],
    );
    changes_exactly(
        &s,
        &["--distance", "300pc"],
        &[
            ("/distance_pc", json!(300.0)),
            (
                &format!("{p}/margin_px"),
                json!(readme_margin(300.0, 6.0, 18.2, 0.07, false)),
            ),
        ],
    );
    assert_eq!(readme_margin(300.0, 6.0, 18.2, 0.07, false), 28.0);
    changes_exactly(
        &s,
        &["--pixel", "4arcsec"],
        &[
            ("/pixel_arcsec", json!(4.0)),
            (
                &format!("{p}/margin_px"),
                json!(readme_margin(410.0, 4.0, 18.2, 0.07, false)),
            ),
        ],
    );
    changes_exactly(&s, &["--mu-h2", "2.33"], &[("/mu_h2", json!(2.33))]);
    changes_exactly(&s, &["--noise", "1e20cm-2"], &[("/noise_rms", json!(1e20))]);
    changes_exactly(
        &s,
        &["--background-width", "0.5"],
        &[("/background/sigma_ln", json!(0.5))],
    );
    changes_exactly(
        &s,
        &["--frame", "galactic"],
        &[("/frame", json!("galactic"))],
    );
    changes_exactly(
        &s,
        &["--no-background"],
        &[
            ("/background", Value::Null),
            ("/background/mean_column_cm2", Value::Null),
            ("/background/sigma_ln", Value::Null),
            ("/background/spectral_index", Value::Null),
        ],
    );
    let mut dropped: Vec<(String, Value)> = leaves(&read_json(&s))
        .into_keys()
        .filter(|k| k.starts_with("/population/"))
        .map(|k| (k, Value::Null))
        .collect();
    dropped.push(("/population".into(), Value::Null));
    let dropped: Vec<(&str, Value)> = dropped
        .iter()
        .map(|(k, v)| (k.as_str(), v.clone()))
        .collect();
    changes_exactly(&s, &["--cores", "0"], &dropped);
}

#[test]
fn the_profile_of_a_specs_random_cores_changes_with_their_margin() {
    let before = read_json(&column_spec());
    let (after, _) = refine(&column_spec(), &["--profile", "bonnor-ebert"]);
    let diff = differences(&before, &after);
    assert_eq!(
        diff.keys().collect::<Vec<_>>(),
        [
            "/population/margin_px",
            "/population/profile",
            "/population/profile/bonnor_ebert/xi_max"
        ],
        "{diff:?}"
    );
    // The critical Bonnor-Ebert sphere: xi = 6.451 (Bonnor 1956; Ebert 1955).
    let xi = after["population"]["profile"]["bonnor_ebert"]["xi_max"]
        .as_f64()
        .unwrap();
    assert!((xi - 6.451).abs() < 1e-3, "{xi}");
    assert_eq!(
        after["population"]["margin_px"].as_f64(),
        Some(readme_margin(410.0, 6.0, 18.2, 0.07, true))
    );
}

#[test]
fn a_column_density_spec_becomes_the_emission_spec_of_the_same_scene() {
    // The demo maps differ only in what they hold: the column-density spec refined by the
    // 850um map's options is the 850um spec, field for field.
    let (after, _) = refine(
        &column_spec(),
        &[
            "--emission",
            "850um",
            "--temperature",
            "14K",
            "--emission-unit",
            "Jy/beam",
            "--noise",
            "0.004",
        ],
    );
    let diff = differences(&read_json(&emission_spec()), &after);
    assert!(diff.is_empty(), "{diff:?}");
}

/// The demo maps' command lines (demo-maps/README.md), changed by `extra`.
fn demo_command<'a>(emission: bool, extra: &[&'a str]) -> Vec<&'a str> {
    let mut args = vec![
        "synth",
        "-q",
        "--size",
        "512x384",
        "--pixel",
        "6arcsec",
        "--beam",
        "18.2arcsec",
        "--centre",
        "152.8125,11.40625",
        "--distance",
        "410pc",
        "--background",
        "2.5e21cm-2",
        "--background-width",
        "0.35",
        "--background-index",
        "3.2",
        "--cores",
        "30",
        "--core-mass",
        "0.5Msun,15Msun",
        "--core-radius",
        "0.02pc,0.07pc",
        "--seed",
        "2026",
    ];
    if emission {
        args.extend([
            "--emission",
            "850um",
            "--temperature",
            "14K",
            "--emission-unit",
            "Jy/beam",
            "--noise",
            "0.004",
        ]);
    } else {
        args.extend(["--noise", "1.5e20cm-2"]);
    }
    // Each option of `extra` (an option and its value) replaces the command line's own.
    for pair in extra.chunks(2) {
        match args.iter().position(|a| *a == pair[0]) {
            Some(i) => args[i + 1] = pair[1],
            None => args.extend_from_slice(pair),
        }
    }
    args
}

#[test]
fn a_refined_spec_makes_the_map_its_command_line_makes() {
    // A spec refined by an option is the map the demo's command line makes with that option
    // changed, byte for byte (the FITS header carries the whole specification too).
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    for (emission, spec, extra) in [
        (false, column_spec(), &["--distance", "300pc"][..]),
        (false, column_spec(), &["--profile", "bonnor-ebert"][..]),
        (true, emission_spec(), &["--emission", "450um"][..]),
        (
            true,
            emission_spec(),
            &["--temperature", "20K", "--beta", "1.7"][..],
        ),
    ] {
        let _ = std::fs::remove_dir_all(d.join("line"));
        let _ = std::fs::remove_dir_all(d.join("spec"));
        let mut line = demo_command(emission, extra);
        line.extend(["-o", "line"]);
        let o = cairn(&line, d);
        assert_eq!(o.code, 0, "{line:?}: {}", o.stderr);
        let mut args = vec![
            "synth",
            "-q",
            "-o",
            "spec",
            "--spec",
            spec.to_str().unwrap(),
        ];
        args.extend_from_slice(extra);
        let o = cairn(&args, d);
        assert_eq!(o.code, 0, "{args:?}: {}", o.stderr);
        for f in ["synth.fits", "synth-truth.csv", "synth-spec.json"] {
            assert!(
                std::fs::read(d.join("line").join(f)).unwrap()
                    == std::fs::read(d.join("spec").join(f)).unwrap(),
                "{extra:?}: {f} differs between the command line and the refined spec"
            );
        }
    }
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

#[test]
fn a_hand_set_margin_is_kept_and_a_default_one_follows_the_map() {
    let dir = tempfile::tempdir().unwrap();
    let mut spec = read_json(&column_spec());
    spec["population"]["margin_px"] = json!(25.0);
    let file = dir.path().join("margin.json");
    std::fs::write(&file, serde_json::to_string_pretty(&spec).unwrap()).unwrap();
    // Made again as it is, silently.
    let (after, stderr) = refine(&file, &[]);
    assert!(differences(&spec, &after).is_empty());
    assert!(stderr.is_empty(), "{stderr}");
    // At another distance the margin set by hand stays, and a warning says the default
    // would differ.
    let (after, stderr) = refine(&file, &["--distance", "300pc"]);
    let diff = differences(&spec, &after);
    assert_eq!(
        diff.keys().collect::<Vec<_>>(),
        ["/distance_pc"],
        "{diff:?}"
    );
    assert!(
        stderr.contains("margin_px") && stderr.contains("28"),
        "{stderr}"
    );
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
fn options_that_apply_to_nothing_in_the_map_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // Without a spec: a column-density map, and no random cores unless --cores.
    for option in [
        &["--temperature", "12K"][..],
        &["--emission-unit", "Jy/beam"][..],
        &["--beta", "1.8"][..],
    ] {
        refused(d, option, option[0], "give --emission");
    }
    for option in [
        &["--core-mass", "1Msun,2Msun"][..],
        &["--core-radius", "0.02pc,0.04pc"][..],
        &["--core-mass-index", "2"][..],
        &["--profile", "bonnor-ebert"][..],
    ] {
        refused(d, option, option[0], "give --cores N");
    }
    refused(
        d,
        &["--cores", "0", "--core-mass", "1Msun,2Msun"],
        "--core-mass",
        "--cores 0 asks for none",
    );
    // With a column-density spec.
    let col = column_spec();
    let col = col.to_str().unwrap();
    refused(
        d,
        &["--spec", col, "--temperature", "12K"],
        "velloran-column-spec.json",
        "give --emission",
    );
    // Its noise is a column density: an emission map needs a noise level in its own unit.
    refused(
        d,
        &["--spec", col, "--emission", "850um"],
        "noise_rms 1.5e20",
        "give --noise in MJy/sr",
    );
    // With an emission spec whose noise is in Jy/beam.
    let em = emission_spec();
    refused(
        d,
        &["--spec", em.to_str().unwrap(), "--emission-unit", "MJy/sr"],
        "noise_rms 0.004 is in Jy/beam",
        "give --noise in MJy/sr",
    );
    // A spec with cores placed by hand only, and no background.
    let mut spec = read_json(&column_spec());
    spec["population"] = Value::Null;
    spec["background"] = Value::Null;
    spec["cores"] = json!([{"x": 100.0, "y": 100.0, "mass_msun": 3.0, "radius_pc": 0.04, "profile": "gaussian"}]);
    std::fs::write(d.join("hand.json"), spec.to_string()).unwrap();
    refused(
        d,
        &["--spec", "hand.json", "--profile", "bonnor-ebert"],
        "hand.json",
        "has no random population",
    );
    refused(
        d,
        &["--spec", "hand.json", "--background-index", "3"],
        "--background-index",
        "give --background",
    );
    // What each refusal asked for is accepted.
    let (after, _) = refine(
        &d.join("hand.json"),
        &[
            "--cores",
            "5",
            "--profile",
            "bonnor-ebert",
            "--background",
            "2e21cm-2",
        ],
    );
    assert_eq!(after["population"]["count"], json!(5));
    assert!(after["population"]["profile"]["bonnor_ebert"].is_object());
    assert!(after["background"]["mean_column_cm2"].as_f64().unwrap() > 1.9e21);
    assert_eq!(after["cores"], spec["cores"]);
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

/// The README's section on specifications, from its heading to the next section.
fn readme_section() -> String {
    let readme =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("README.md")).unwrap();
    let start = readme
        .find("### Synth specifications")
        .expect("README has a section on synth specifications");
    let rest = &readme[start..];
    let end = rest[4..].find("\n## ").map_or(rest.len(), |i| i + 4);
    rest[..end].to_string()
}

#[test]
fn the_readme_example_spec_makes_its_two_cores() {
    let section = readme_section();
    let start = section.find("```json\n").expect("an example spec") + 8;
    let example = &section[start..start + section[start..].find("```").unwrap()];
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("two.json"), example).unwrap();
    let (after, _) = refine(&dir.path().join("two.json"), &[]);
    // Written back with the same values (the unit in its written spelling).
    let mut given: Value = serde_json::from_str(example).unwrap();
    given["output"]["dust_emission"]["unit"] = json!("JyPerBeam");
    let diff = differences(&given, &after);
    assert!(diff.is_empty(), "{diff:?}");
    // The truth table lists the two cores as placed.
    let o = cairn(
        &["synth", "-q", "-o", "two", "--spec", "two.json"],
        dir.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let truth = std::fs::read_to_string(dir.path().join("two/synth-truth.csv")).unwrap();
    let rows: Vec<Vec<&str>> = truth
        .lines()
        .filter(|l| !l.starts_with('#'))
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    assert_eq!(rows.len(), 2, "{truth}");
    let header: Vec<&str> = truth
        .lines()
        .find(|l| !l.starts_with('#'))
        .unwrap()
        .split(',')
        .collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    for (row, (x, mass, profile)) in rows
        .iter()
        .zip([("40.0", "2.0", "gaussian"), ("88.0", "5.0", "bonnor_ebert")])
    {
        assert_eq!(row[col("x")], x);
        assert_eq!(row[col("mass_msun")], mass);
        assert_eq!(row[col("profile")], profile);
    }
}

#[test]
fn the_readme_names_every_field_of_a_spec() {
    let section = readme_section();
    let mut names = std::collections::BTreeSet::new();
    let mut with_mu = read_json(&column_spec());
    with_mu["mu_h2"] = json!(2.33);
    with_mu["cores"] = json!([{"x": 1.0, "y": 1.0, "mass_msun": 1.0, "radius_pc": 0.02,
        "profile": {"bonnor_ebert": {"xi_max": 6.45}}}]);
    for spec in [read_json(&emission_spec()), with_mu] {
        for k in leaves(&spec).keys() {
            for part in k
                .split('/')
                .filter(|p| !p.is_empty() && p.parse::<usize>().is_err())
            {
                names.insert(part.to_string());
            }
        }
    }
    assert!(names.contains("xi_max") && names.contains("kappa0_cm2_per_g"));
    for name in &names {
        assert!(
            section.contains(&format!("`{name}`")) || section.contains(&format!("\"{name}\"")),
            "the README's section on specifications does not name `{name}`"
        );
    }
}

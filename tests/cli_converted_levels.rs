//! `--floor` and `--prominence` given as a column density or an extinction on a map of
//! another kind: converted to the map's unit by the conversion the run's masses use.
//!
//! Checks: the converted levels are the given column density divided by the conversion that
//! `cairn inspect` reports for the same assumptions (itself checked against astropy 8.0.2 in
//! `physics_reference.rs`), and the run's catalogue is, row for row, the run given those
//! levels in map units; magnitudes follow the published ratios the defaults cite, N(H2)/A_V =
//! 9.4e20 cm-2 mag-1 (Bohlin, Savage & Drake 1978, ApJ 224, 132) and A_K/A_V = 0.112 (Rieke &
//! Lebofsky 1985, ApJ 288, 618); a conversion that differs from pixel to pixel, or that lacks
//! an assumption, is refused in one sentence. The maps are the invented demo cloud's.

#[path = "common/cli.rs"]
mod cli;

use cli::{cairn, check_refused, listing};
use std::path::{Path, PathBuf};

fn demo(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("demo-maps")
        .join(name)
}

fn run_record(dir: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join("run.json")).unwrap()).unwrap()
}

/// The catalogue's rows, without its commented header (which says how the levels were given).
fn rows(dir: &Path) -> Vec<String> {
    std::fs::read_to_string(dir.join("structures.csv"))
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(str::to_string)
        .collect()
}

fn level(record: &serde_json::Value, name: &str) -> f64 {
    record["parameters"][name]["value"].as_f64().unwrap()
}

#[test]
fn a_column_density_level_on_an_emission_map_is_the_masses_conversion() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let map = demo("velloran-850um.fits");
    let map = map.to_str().unwrap();
    let physics = ["--distance", "410pc", "--temperature", "14K"];
    let mut args = vec!["inspect", map, "--json"];
    args.extend_from_slice(&physics);
    let o = cairn(&args, dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let inspect: serde_json::Value = serde_json::from_str(&o.stdout).unwrap();
    let per_unit = inspect["conversion"]["column_per_unit_cm2"]
        .as_f64()
        .unwrap();
    // inspect gives its suggested floor as a column density and an extinction by the same
    // conversion (A_V by Bohlin, Savage & Drake 1978).
    let suggested = &inspect["suggested"];
    let floor = suggested["floor"].as_f64().unwrap();
    let column = suggested["floor_column_cm2"].as_f64().unwrap();
    assert!(
        (column / (floor * per_unit) - 1.0).abs() < 1e-12,
        "{column}"
    );
    let av = suggested["floor_av_mag"].as_f64().unwrap();
    assert!((av / (column / 9.4e20) - 1.0).abs() < 1e-12, "{av}");

    let mut args = vec![
        "segment",
        map,
        "-o",
        "converted",
        "--floor",
        "3.4e21cm-2",
        "--prominence",
        "1mag",
        "--no-figure",
    ];
    args.extend_from_slice(&physics);
    let o = cairn(&args, dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout
            .contains("--floor read as 3.4e21 cm-2 of H2, converted to the map's unit"),
        "{}",
        o.stdout
    );
    assert!(
        o.stdout
            .contains("--prominence read as 1mag of A_V = 9.4e20 cm-2 of H2"),
        "{}",
        o.stdout
    );
    let record = run_record(&dir.join("converted"));
    let floor = level(&record, "floor");
    let prominence = level(&record, "prominence");
    // 1 mag of A_V is 9.4e20 cm-2 of H2 (Bohlin, Savage & Drake 1978).
    for (got, column) in [(floor, 3.4e21), (prominence, 9.4e20)] {
        let want = column / per_unit;
        assert!(
            ((got - want) / want).abs() < 1e-12,
            "{got} against {want} Jy/beam"
        );
    }
    assert_eq!(
        record["parameters"]["floor"]["typed"].as_str().unwrap(),
        "3.4e21cm-2 = 3.4e21 cm-2 of H2"
    );
    assert_eq!(
        record["parameters"]["prominence"]["given"]
            .as_str()
            .unwrap(),
        "1mag of A_V = 9.4e20 cm-2 of H2"
    );

    // The same levels in map units (the recorded values, which round-trip as text) give the
    // very catalogue rows.
    let (f, p) = (format!("{floor}"), format!("{prominence}"));
    let mut args = vec![
        "segment",
        map,
        "-o",
        "plain",
        "--floor",
        &f,
        "--prominence",
        &p,
        "--no-figure",
        "-q",
    ];
    args.extend_from_slice(&physics);
    let o = cairn(&args, dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let (a, b) = (rows(&dir.join("converted")), rows(&dir.join("plain")));
    assert!(a.len() > 10, "{} rows", a.len());
    assert_eq!(a, b);
}

#[test]
fn an_extinction_level_on_a_column_map_follows_the_band() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let map = demo("velloran-column.fits");
    let map = map.to_str().unwrap();
    for (out, band, per_mag) in [
        // Bohlin, Savage & Drake 1978: 9.4e20 cm-2 per magnitude of A_V.
        ("v", "V", 9.4e20),
        // ... and Rieke & Lebofsky 1985: A_K = 0.112 A_V.
        ("k", "K", 9.4e20 / 0.112),
    ] {
        let o = cairn(
            &[
                "segment",
                map,
                "-o",
                out,
                "--floor",
                "0.5mag",
                "--prominence",
                "0.1mag",
                "--extinction-band",
                band,
                "--no-figure",
                "-q",
            ],
            dir,
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        let record = run_record(&dir.join(out));
        for (name, mag) in [("floor", 0.5), ("prominence", 0.1)] {
            let want = mag * per_mag;
            let got = level(&record, name);
            assert!(((got - want) / want).abs() < 1e-12, "{band} {name}: {got}");
        }
    }
    // A column density on a map of column densities in another unit is a plain conversion.
    let o = cairn(
        &[
            "segment",
            map,
            "-o",
            "m2",
            "--floor",
            "3e25m-2",
            "--no-figure",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let got = level(&run_record(&dir.join("m2")), "floor");
    assert!((got / 3e21 - 1.0).abs() < 1e-12, "{got}");
}

#[test]
fn a_conversion_that_is_not_one_number_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let demo = demo("velloran-850um.fits");
    let m = cairn::map::load(&demo, &cairn::map::LoadOptions::default()).unwrap();
    let mut h = m.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("K".into()), "");
    let t = m.data.mapv(|_| 14.0f32);
    cairn::fits_write::write_image_f32(&dir.join("t14.fits"), t.view(), &h, true).unwrap();
    let mut h = m.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("Jy/pixel".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("perpix.fits"), m.data.view(), &h, true).unwrap();
    let mut h = m.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("K km/s".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("kkms.fits"), m.data.view(), &h, true).unwrap();
    let demo = demo.to_str().unwrap();
    let cases: [(&[&str], &str, &str); 4] = [
        (
            &[demo, "--floor", "3e21cm-2"],
            "velloran-850um.fits",
            "needs a dust temperature",
        ),
        (
            &[demo, "--floor", "3e21cm-2", "--temperature-map", "t14.fits"],
            "velloran-850um.fits",
            "differs from pixel to pixel with the temperature map",
        ),
        (
            &[
                "perpix.fits",
                "--prominence",
                "2mag",
                "--temperature",
                "14K",
            ],
            "perpix.fits",
            "each pixel's solid angle",
        ),
        (
            &["kkms.fits", "--unit", "other:K km/s", "--floor", "3e21cm-2"],
            "--floor '3e21cm-2'",
            "not a level of this map",
        ),
    ];
    for (i, (extra, names, says)) in cases.iter().enumerate() {
        let out = format!("out{i}");
        let mut args = vec!["segment", "-o", &out];
        args.extend_from_slice(extra);
        let o = cairn(&args, dir);
        check_refused(&o, &args, names, says);
        assert!(!listing(dir).contains(&out), "{args:?} left {out}");
    }
}

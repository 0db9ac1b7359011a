//! Maps in a unit cairn does not convert to column density (a line-integrated intensity in
//! K km/s, a map without a unit): segmented for their structure only.
//!
//! Self-consistency checks: the hierarchy and the measurements in map units do not depend on
//! the unit's name, so a map written with BUNIT 'K km/s' must give, with the same thresholds
//! in map units, the very catalogue rows (ids, parents, positions, areas, sums) of the same
//! pixels written with BUNIT 'cm-2'; only the column-density, mass and physics columns, which
//! need a conversion cairn does not know for K km/s, are left out. The test maps are invented
//! by `cairn synth`.

#[path = "common/cli.rs"]
mod cli;

use cli::{Outcome, cairn, check_refused};
use std::collections::BTreeMap;
use std::path::Path;

/// The columns of a catalogue CSV by name, as text.
fn catalogue_columns(path: &Path) -> BTreeMap<String, Vec<String>> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let names: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let mut cols: BTreeMap<String, Vec<String>> =
        names.iter().map(|n| (n.clone(), Vec::new())).collect();
    for l in lines {
        for (n, v) in names.iter().zip(l.split(',')) {
            cols.get_mut(n).unwrap().push(v.to_string());
        }
    }
    cols
}

/// An invented column-density map (`cairn synth`, cores on a turbulent background) in
/// `dir/s/synth.fits`, and the same pixels and header with BUNIT 'K km/s' in
/// `dir/kkms.fits`, written with cairn's own FITS writer.
fn maps(dir: &Path) {
    let o = cairn(
        &[
            "synth", "-o", "s", "--size", "96", "--cores", "6", "--seed", "11", "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let base = cairn::map::load(
        &dir.join("s/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    assert_eq!(base.unit_text, "cm-2");
    let mut h = base.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("K km/s".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("kkms.fits"), base.data.view(), &h, false)
        .unwrap();
}

/// The same thresholds in map units for both maps: the noise-free part of the test does not
/// depend on a noise estimate. The distance and temperature would give the cm-2 map masses
/// and states.
const THRESHOLDS: [&str; 10] = [
    "--floor",
    "4e21",
    "--prominence",
    "5e20",
    "--min-area",
    "9px",
    "--distance",
    "250pc",
    "--temperature",
    "15K",
];

fn segment(dir: &Path, map: &str, out: &str, extra: &[&str]) -> Outcome {
    let mut args = vec!["segment", map, "-o", out, "--no-figure"];
    args.extend_from_slice(&THRESHOLDS);
    args.extend_from_slice(extra);
    cairn(&args, dir)
}

#[test]
fn a_k_km_s_map_gives_the_structure_of_the_same_pixels_in_cm2() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let col = segment(dir, "s/synth.fits", "col", &[]);
    assert_eq!(col.code, 0, "{}", col.stderr);
    let kel = segment(dir, "kkms.fits", "kel", &[]);
    assert_eq!(kel.code, 0, "{}", kel.stderr);

    // One warning: the unit read, what masses need, how to correct a wrong header.
    let warnings: Vec<&str> = kel
        .stderr
        .lines()
        .filter(|l| l.starts_with("warning:"))
        .collect();
    assert_eq!(warnings.len(), 1, "{}", kel.stderr);
    for says in [
        "BUNIT 'K km/s' is a unit cairn does not convert to column density",
        "masses and the physics need a map of dust emission, column density or extinction",
        "give --unit with one of cm-2",
    ] {
        assert!(warnings[0].contains(says), "{}", warnings[0]);
    }
    assert!(!col.stderr.contains("warning:"), "{}", col.stderr);
    assert!(kel.stdout.contains("no masses:"), "{}", kel.stdout);

    let a = catalogue_columns(&dir.join("col/structures.csv"));
    let b = catalogue_columns(&dir.join("kel/structures.csv"));
    let leaves = b["kind"].iter().filter(|k| *k == "leaf").count();
    assert!(
        leaves >= 2,
        "the test map should hold several leaves: {leaves}"
    );
    // The structure: identical to the last digit.
    for name in [
        "id",
        "kind",
        "parent",
        "n_children",
        "depth",
        "peak_x",
        "peak_y",
        "peak",
        "x",
        "y",
        "ra",
        "dec",
        "area_px",
        "radius_px",
        "area_sky",
        "fwhm_major",
        "fwhm_minor",
        "pa",
        "sum",
        "mean",
        "merge_level",
        "excess_sum",
        "at_edge",
    ] {
        assert_eq!(a[name], b[name], "column {name}");
    }
    // The masses and the physics: present for the cm-2 map, left out for K km/s (there is
    // nothing to put in them), and no state is claimed.
    for name in [
        "n_peak",
        "n_mean",
        "mass",
        "mass_excess",
        "density",
        "state",
    ] {
        assert!(a.contains_key(name), "cm-2 run lacks {name}");
        assert!(!b.contains_key(name), "K km/s run has {name}");
    }
    assert!(!kel.stdout.contains("leaves by state"), "{}", kel.stdout);

    // The map's own unit on the levels and sums, in the CSV header, the FITS table and the
    // run record; a sum is K km/s times pixel, written with the pixel in the numerator.
    let csv = std::fs::read_to_string(dir.join("kel/structures.csv")).unwrap();
    assert!(csv.contains("# column peak [K km/s]:"), "{csv}");
    assert!(csv.contains("# column sum [K km pixel/s]:"), "{csv}");
    // The header lists only the assumptions the run used: the distance (sizes in pc) and the
    // beam, not the temperature and molecular weights that only the masses would use.
    let col_csv = std::fs::read_to_string(dir.join("col/structures.csv")).unwrap();
    for name in ["distance", "temperature", "mu_h2", "mu_p", "m_h"] {
        let line = format!("# parameter {name} = ");
        assert!(col_csv.contains(&line), "cm-2 run lacks {name}");
        assert_eq!(
            csv.contains(&line),
            name == "distance",
            "K km/s run and {name}"
        );
    }
    let mut f = fitsio::FitsFile::open(dir.join("kel/structures.fits")).unwrap();
    let hdu = f.hdu(1).unwrap();
    let tfields: i64 = hdu.read_key(&mut f, "TFIELDS").unwrap();
    let mut units = BTreeMap::new();
    for i in 1..=tfields {
        let name: String = hdu.read_key(&mut f, &format!("TTYPE{i}")).unwrap();
        let unit: Option<String> = hdu.read_key(&mut f, &format!("TUNIT{i}")).ok();
        units.insert(name, unit);
    }
    assert_eq!(units["peak"].as_deref(), Some("K km/s"));
    assert_eq!(units["mean"].as_deref(), Some("K km/s"));
    assert_eq!(units["sum"].as_deref(), Some("K km pixel/s"));
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("kel/run.json")).unwrap()).unwrap();
    assert_eq!(run["map"]["unit"], "K km/s");
    assert_eq!(run["map"]["unit_kind"], "no conversion to column density");
    assert_eq!(run["parameters"]["floor"]["value"], 4e21);
    assert!(run["physics"]["mass_sensitivity_msun"].is_null());

    // The label maps are the same pixel for pixel.
    let labels = |run: &str| {
        cairn::map::load(
            &dir.join(run).join("labels.fits"),
            &cairn::map::LoadOptions {
                require_unit: false,
                ..Default::default()
            },
        )
        .unwrap()
        .data
    };
    assert_eq!(labels("col"), labels("kel"));

    // A threshold in noise widths works too: the same structure again, as the noise
    // estimate and the background do not depend on the unit's name either.
    let col5 = cairn(
        &[
            "segment",
            "s/synth.fits",
            "-o",
            "col5",
            "--no-figure",
            "-q",
            "--floor",
            "5sigma",
        ],
        dir,
    );
    let kel5 = cairn(
        &[
            "segment",
            "kkms.fits",
            "-o",
            "kel5",
            "--no-figure",
            "-q",
            "--floor",
            "5sigma",
        ],
        dir,
    );
    assert_eq!(
        (col5.code, kel5.code),
        (0, 0),
        "{}{}",
        col5.stderr,
        kel5.stderr
    );
    let (a5, b5) = (
        catalogue_columns(&dir.join("col5/structures.csv")),
        catalogue_columns(&dir.join("kel5/structures.csv")),
    );
    for name in ["id", "parent", "area_px", "x", "y", "sum"] {
        assert_eq!(a5[name], b5[name], "column {name} with --floor 5sigma");
    }

    // The catalogue of grown leaves is in the map's unit too, without masses.
    let o = segment(dir, "kkms.fits", "grown", &["--grow-leaves", "-q"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let grown = std::fs::read_to_string(dir.join("grown/structures-grown.csv")).unwrap();
    assert!(grown.contains("# column sum [K km pixel/s]:"), "{grown}");
    assert!(!catalogue_columns(&dir.join("grown/structures-grown.csv")).contains_key("mass"));

    // draw draws such a run again, reading the map in its unit; compare has no masses to
    // compare and says why.
    let o = cairn(&["draw", "kel", "-o", "fig", "-q"], dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(dir.join("fig/overlay.png").is_file());
    assert!(dir.join("fig/tree.png").is_file());
    let args = ["compare", "kel", "col", "-o", "cmp"];
    let o = cairn(&args, dir);
    check_refused(
        &o,
        &args,
        "kel/structures.csv",
        "its map is in the unit K km/s, which cairn does not convert to column density",
    );
    assert!(!dir.join("cmp").exists());
}

#[test]
fn a_threshold_with_a_physical_unit_is_refused_on_such_a_map() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    for (option, value) in [
        ("--floor", "2e21cm-2"),
        ("--prominence", "0.05Jy/beam"),
        ("--floor", "3mag"),
    ] {
        let args = ["segment", "kkms.fits", "-o", "run", option, value];
        let o = cairn(&args, dir);
        // One sentence on stderr besides the map's unit warning, which comes first.
        let refusal = Outcome {
            code: o.code,
            stdout: o.stdout.clone(),
            stderr: o
                .stderr
                .lines()
                .filter(|l| !l.starts_with("warning:"))
                .collect::<Vec<_>>()
                .join("\n"),
        };
        check_refused(&refusal, &args, option, "not a level of this map");
        assert!(
            refusal.stderr.contains("in the map's unit (K km/s)"),
            "{}",
            refusal.stderr
        );
        assert!(!dir.join("run").exists(), "{option} {value} wrote outputs");
    }
}

#[test]
fn inspect_shows_the_unit_as_read_without_a_conversion() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let o = cairn(&["inspect", "kkms.fits"], dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let unit_line = o
        .stdout
        .lines()
        .find(|l| l.starts_with("unit "))
        .expect("a unit line");
    assert!(unit_line.contains("K km/s"), "{unit_line}");
    assert!(
        unit_line.contains("no conversion to column density"),
        "{unit_line}"
    );
    assert!(
        o.stdout
            .contains("conversion      none: the unit 'K km/s' has no conversion"),
        "{}",
        o.stdout
    );
    let o = cairn(&["inspect", "kkms.fits", "--json"], dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let j: serde_json::Value = serde_json::from_str(&o.stdout).unwrap();
    assert_eq!(j["unit"], "K km/s");
    assert_eq!(j["unit_kind"], "no conversion to column density");
    assert_eq!(j["unit_source"], "header");
    assert!(j["conversion"]["column_per_unit_cm2"].is_null());
    assert!(
        j["conversion"]["assumptions"]
            .as_array()
            .unwrap()
            .is_empty()
    );
    assert!(
        j["warnings"][0]
            .as_str()
            .unwrap()
            .contains("BUNIT 'K km/s' is a unit cairn does not convert")
    );
}

/// `--unit other:UNIT` makes a map in a unit cairn converts be read as one it does not (the
/// structure alone, in the unit given), `--unit none` as values without a unit; a bare unit
/// cairn does not convert is refused, so a misspelt unit does not silently lose the masses.
#[test]
fn unit_option_names_a_unit_without_conversion() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let o = segment(dir, "s/synth.fits", "forced", &["--unit", "other:K.km.s-1"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    // Chosen on the command line: no warning about the header's unit; the masses that
    // --distance asks for and that are not made are the one warning.
    let warnings: Vec<&str> = o
        .stderr
        .lines()
        .filter(|l| l.starts_with("warning:"))
        .collect();
    assert_eq!(
        warnings,
        [
            "warning: no masses: the unit 'K.km.s-1' has no conversion to column density: masses and the physics need a map of dust emission, column density or extinction (give --unit if the map's unit is wrong)"
        ],
        "{}",
        o.stderr
    );
    let col = segment(dir, "s/synth.fits", "col", &[]);
    assert_eq!(col.code, 0, "{}", col.stderr);
    let a = catalogue_columns(&dir.join("col/structures.csv"));
    let b = catalogue_columns(&dir.join("forced/structures.csv"));
    assert_eq!(a["sum"], b["sum"]);
    assert!(!b.contains_key("mass"));
    let csv = std::fs::read_to_string(dir.join("forced/structures.csv")).unwrap();
    assert!(csv.contains("# column peak [K.km.s-1]:"), "{csv}");

    let o = segment(dir, "kkms.fits", "plain", &["--unit", "none"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let csv = std::fs::read_to_string(dir.join("plain/structures.csv")).unwrap();
    // No unit on levels; a sum is then in pixels (map unit times pixel).
    assert!(csv.contains("# column peak:"), "{csv}");
    assert!(csv.contains("# column sum [pixel]:"), "{csv}");
    assert_eq!(
        catalogue_columns(&dir.join("plain/structures.csv"))["sum"],
        a["sum"]
    );

    let args = ["segment", "kkms.fits", "-o", "bare", "--unit", "K km/s"];
    let o = cairn(&args, dir);
    check_refused(&o, &args, "--unit 'K km/s'", "other:UNIT");
    assert!(!dir.join("bare").exists());
}

/// Maps beside such a map, and smoothing it: a noise map must be in the map's very unit
/// (cairn cannot convert mK km/s to K km/s without knowing either); `--common-resolution`
/// smooths a K km/s map as a brightness, but refuses a unit per beam, whose values would
/// have to be rescaled by the ratio of the beams' areas in a way the unit's text does not
/// tell cairn.
#[test]
fn noise_maps_and_common_resolution_of_such_maps() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let base = cairn::map::load(&dir.join("kkms.fits"), &Default::default()).unwrap();
    let noise = ndarray::Array2::<f32>::from_elem(base.data.dim(), 3e20);
    for (name, unit) in [("noise-k.fits", "K km/s"), ("noise-mk.fits", "mK km/s")] {
        let mut h = base.header.clone();
        h.set("BUNIT", cairn::header::Value::Str(unit.into()), "");
        cairn::fits_write::write_image_f32(&dir.join(name), noise.view(), &h, false).unwrap();
    }
    let o = cairn(
        &[
            "segment",
            "kkms.fits",
            "-o",
            "nk",
            "--no-figure",
            "-q",
            "--noise-map",
            "noise-k.fits",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("nk/run.json")).unwrap()).unwrap();
    // The median of a constant noise map, in the map's unit (f32 3e20 read back as f64).
    assert_eq!(run["noise"]["value"].as_f64().unwrap(), 3e20f32 as f64);
    let args = [
        "segment",
        "kkms.fits",
        "-o",
        "nmk",
        "-q",
        "--noise-map",
        "noise-mk.fits",
    ];
    let o = cairn(&args, dir);
    let refusal = Outcome {
        code: o.code,
        stdout: o.stdout.clone(),
        stderr: o
            .stderr
            .lines()
            .filter(|l| !l.starts_with("warning:"))
            .collect::<Vec<_>>()
            .join("\n"),
    };
    check_refused(
        &refusal,
        &args,
        "noise-mk.fits",
        "must be in the map's unit (K km/s)",
    );
    assert!(!dir.join("nmk").exists());

    let smooth = |map: &str, out: &str| {
        cairn(
            &[
                "segment",
                map,
                "-o",
                out,
                "--no-figure",
                "-q",
                "--distance",
                "250pc",
                "--common-resolution",
                "0.05pc",
            ],
            dir,
        )
    };
    let o = smooth("kkms.fits", "smooth");
    assert_eq!(o.code, 0, "{}", o.stderr);
    let mut h = base.header.clone();
    h.set(
        "BUNIT",
        cairn::header::Value::Str("Jy/beam km/s".into()),
        "",
    );
    cairn::fits_write::write_image_f32(&dir.join("perbeam.fits"), base.data.view(), &h, false)
        .unwrap();
    let o = smooth("perbeam.fits", "smooth-beam");
    assert_eq!(o.code, 2, "{}", o.stderr);
    let line = o.stderr.lines().last().unwrap_or("");
    assert!(line.contains("perbeam.fits"), "{}", o.stderr);
    assert!(
        line.contains("cannot tell to be a brightness"),
        "{}",
        o.stderr
    );
    assert!(!dir.join("smooth-beam").exists());
    // A per-pixel count (not a brightness: averaging would not keep its sums) is refused too.
    h.set("BUNIT", cairn::header::Value::Str("counts".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("counts.fits"), base.data.view(), &h, false)
        .unwrap();
    let o = smooth("counts.fits", "smooth-counts");
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(
        o.stderr
            .lines()
            .last()
            .unwrap_or("")
            .contains("counts.fits"),
        "{}",
        o.stderr
    );
    assert!(!dir.join("smooth-counts").exists());
}

/// A BUNIT that names a converted quantity cairn cannot read (a scale factor, an unfamiliar
/// spelling) is refused with one sentence naming --unit and other:UNIT, rather than measured
/// without the masses the map holds; velocity-integrated units and plain words still run.
#[test]
fn a_column_density_or_brightness_cairn_cannot_read_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let base = cairn::map::load(
        &dir.join("s/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    for (i, bunit) in [
        "1e21 cm-2",
        "H2/cm2",
        "mJy/sqarcmin",
        "W m-2 sr-1",
        "MJy/str",
    ]
    .iter()
    .enumerate()
    {
        let mut h = base.header.clone();
        h.set("BUNIT", cairn::header::Value::Str((*bunit).into()), "");
        let name = format!("odd{i}.fits");
        cairn::fits_write::write_image_f32(&dir.join(&name), base.data.view(), &h, false).unwrap();
        let args = ["segment", name.as_str(), "-o", "run"];
        let o = cairn(&args, dir);
        check_refused(&o, &args, &name, "--unit other:UNIT");
        assert!(o.stderr.contains(bunit), "{bunit}: {}", o.stderr);
        assert!(!dir.join("run").exists());
        // inspect describes the map and says, in the same words, that segment refuses it
        // (not that its structure would be measured).
        let o = cairn(&["inspect", name.as_str(), "--json"], dir);
        assert_eq!(o.code, 0, "{bunit}: {}", o.stderr);
        let v: serde_json::Value = serde_json::from_str(&o.stdout).unwrap();
        let warnings: Vec<&str> = v["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(|w| w.as_str())
            .collect();
        assert!(
            warnings.iter().any(
                |w| w.contains(&format!("BUNIT '{bunit}', which looks like"))
                    && w.ends_with("segment refuses it as it is")
            ),
            "{bunit}: {warnings:?}"
        );
        assert!(
            !warnings
                .iter()
                .any(|w| w.contains("only the structure is measured")),
            "{bunit}: {warnings:?}"
        );
    }
    for bunit in ["Jy/beam km/s", "counts"] {
        let mut h = base.header.clone();
        h.set("BUNIT", cairn::header::Value::Str(bunit.into()), "");
        cairn::fits_write::write_image_f32(&dir.join("line.fits"), base.data.view(), &h, true)
            .unwrap();
        let o = cairn(
            &[
                "segment",
                "line.fits",
                "-o",
                "line",
                "--no-figure",
                "--force",
            ],
            dir,
        );
        assert_eq!(o.code, 0, "{bunit}: {}", o.stderr);
    }
}

/// --extinction-band on a map of dust emission changes nothing, and a warning says so
/// (the user may have meant the map to be an extinction map); on an extinction map, none.
#[test]
fn an_extinction_band_for_a_map_of_another_kind_is_said() {
    let d = tempfile::tempdir().unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let o = cairn(
        &["inspect", demo.to_str().unwrap(), "--extinction-band", "K"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    // inspect's report (stdout) carries its warnings.
    assert!(
        o.stdout.contains(
            "--extinction-band applies to extinction maps, and this map's unit 'Jy/beam' is not one"
        ),
        "{}",
        o.stdout
    );
    let o = cairn(
        &[
            "inspect",
            demo.to_str().unwrap(),
            "--unit",
            "mag",
            "--extinction-band",
            "K",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        !o.stdout.contains("--extinction-band applies"),
        "{}",
        o.stdout
    );
}

/// BUNIT '1', the FITS unit of a dimensionless value (FITS Standard 4.0 sec. 4.3.1), is a map
/// without a unit: measured for its structure only, as the README says of unitless maps, not
/// refused as an unreadable column density. Self-consistency: the same pixels give the very
/// structure of the cm-2 map; the catalogue writes no unit for the levels (a sum is in
/// pixels) and keeps the header's '1' as `bunit`; the masses asked for with --distance are
/// not made, and a warning says so.
#[test]
fn a_dimensionless_map_is_measured_for_its_structure() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let base = cairn::map::load(&dir.join("s/synth.fits"), &Default::default()).unwrap();
    let mut h = base.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("1".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("one.fits"), base.data.view(), &h, false).unwrap();
    let col = segment(dir, "s/synth.fits", "col", &[]);
    assert_eq!(col.code, 0, "{}", col.stderr);
    let one = segment(dir, "one.fits", "one", &[]);
    assert_eq!(one.code, 0, "{}", one.stderr);
    let warnings: Vec<&str> = one
        .stderr
        .lines()
        .filter(|l| l.starts_with("warning:"))
        .collect();
    assert_eq!(
        warnings,
        [
            "warning: no masses: a map without a unit has no conversion to column density: masses and the physics need a map of dust emission, column density or extinction (give --unit if the map's unit is wrong)"
        ],
        "{}",
        one.stderr
    );
    let a = catalogue_columns(&dir.join("col/structures.csv"));
    let b = catalogue_columns(&dir.join("one/structures.csv"));
    for name in [
        "id", "parent", "peak_x", "peak_y", "area_px", "x", "y", "sum",
    ] {
        assert_eq!(a[name], b[name], "column {name}");
    }
    assert!(!b.contains_key("mass"));
    let csv = std::fs::read_to_string(dir.join("one/structures.csv")).unwrap();
    for says in [
        "# column peak:",
        "# column sum [pixel]:",
        "# parameter unit =   (",
        "# parameter bunit = 1  (",
    ] {
        assert!(csv.contains(says), "{says}");
    }
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("one/run.json")).unwrap()).unwrap();
    assert_eq!(run["map"]["unit"], "");
    assert_eq!(run["map"]["header_unit"], "1");
    assert_eq!(run["map"]["unit_kind"], "no conversion to column density");
    assert!(
        run["warnings"].as_array().unwrap().iter().any(|w| w
            .as_str()
            .unwrap()
            .starts_with("no masses: a map without a unit")),
        "{}",
        run["warnings"]
    );
    // inspect has nothing to say against its unit.
    let o = cairn(&["inspect", "one.fits", "--json"], dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let j: serde_json::Value = serde_json::from_str(&o.stdout).unwrap();
    assert_eq!(j["unit_kind"], "no conversion to column density");
    assert!(
        j["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .all(|w| !w.as_str().unwrap().contains("BUNIT")),
        "{}",
        j["warnings"]
    );
}

/// The jansky by its name, `Jansky/beam` or `JANSKY/BEAM` (astropy 8.0.2 reads both as
/// Jy/beam), is the flux density per beam of `Jy/beam`: the same catalogue to the last digit,
/// masses included, in the unit written `Jy/beam`, with the header's spelling as `bunit`.
#[test]
fn the_jansky_by_name_is_read_as_jy() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let base = cairn::map::load(&dir.join("s/synth.fits"), &Default::default()).unwrap();
    let mut outs = Vec::new();
    for (i, unit) in ["Jy/beam", "Jansky/beam", "JANSKY/BEAM"].iter().enumerate() {
        let mut h = base.header.clone();
        h.set("BUNIT", cairn::header::Value::Str((*unit).into()), "");
        let name = format!("m{i}.fits");
        cairn::fits_write::write_image_f32(&dir.join(&name), base.data.view(), &h, false).unwrap();
        let out = format!("r{i}");
        let o = segment(dir, &name, &out, &["--wavelength", "850um", "-q"]);
        assert_eq!(o.code, 0, "{unit}: {}", o.stderr);
        assert!(!o.stderr.contains("warning"), "{unit}: {}", o.stderr);
        let csv = std::fs::read_to_string(dir.join(&out).join("structures.csv")).unwrap();
        assert!(csv.contains("# column peak [Jy/beam]:"), "{unit}");
        assert!(
            csv.contains(&format!("# parameter bunit = {unit}  (")),
            "{unit}"
        );
        outs.push(catalogue_columns(&dir.join(&out).join("structures.csv")));
    }
    assert!(outs[0].contains_key("mass"));
    assert_eq!(outs[0], outs[1]);
    assert_eq!(outs[0], outs[2]);
}

/// A unit written as a product with its inverse factor first, `beam-1 Jy` (as some writers put
/// it; FITS Standard 4.0 sec. 4.3 writes a product of factors separated by blanks or `.`, and
/// astropy 8.0.2 reads `beam-1 Jy` as Jy/beam), is the flux density per beam of `Jy/beam`,
/// in the header and in `--unit`: the same catalogue to the last digit, masses included, in
/// the unit written `Jy/beam`, with the header's spelling as `bunit`; so `beam-1 mJy` is
/// `mJy/beam` and `sr-1 MJy` is `MJy/sr`, and so in capitals (`JY BEAM-1`, `BEAM-1 JY`,
/// `MJY SR-1`, as some writers put a whole unit in upper case).
#[test]
fn a_unit_with_its_inverse_factor_first_is_read_as_the_other_way_round() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let base = cairn::map::load(&dir.join("s/synth.fits"), &Default::default()).unwrap();
    let mut outs = BTreeMap::new();
    for (i, (unit, read)) in [
        ("Jy/beam", "Jy/beam"),
        ("beam-1 Jy", "Jy/beam"),
        ("beam-1.Jy", "Jy/beam"),
        ("mJy/beam", "mJy/beam"),
        ("beam-1 mJy", "mJy/beam"),
        ("MJy/sr", "MJy/sr"),
        ("sr-1 MJy", "MJy/sr"),
        ("JY BEAM-1", "Jy/beam"),
        ("BEAM-1 JY", "Jy/beam"),
        ("JY.BEAM-1", "Jy/beam"),
        ("MJY SR-1", "MJy/sr"),
        ("SR-1 MJY", "MJy/sr"),
    ]
    .into_iter()
    .enumerate()
    {
        let mut h = base.header.clone();
        h.set("BUNIT", cairn::header::Value::Str(unit.into()), "");
        let name = format!("m{i}.fits");
        cairn::fits_write::write_image_f32(&dir.join(&name), base.data.view(), &h, false).unwrap();
        let out = format!("r{i}");
        let o = segment(dir, &name, &out, &["--wavelength", "850um", "-q"]);
        assert_eq!(o.code, 0, "{unit}: {}", o.stderr);
        assert!(!o.stderr.contains("warning"), "{unit}: {}", o.stderr);
        let csv = std::fs::read_to_string(dir.join(&out).join("structures.csv")).unwrap();
        assert!(csv.contains(&format!("# column peak [{read}]:")), "{unit}");
        assert!(
            csv.contains(&format!("# parameter bunit = {unit}  (")),
            "{unit}"
        );
        let cols = catalogue_columns(&dir.join(&out).join("structures.csv"));
        assert!(cols.contains_key("mass"), "{unit}");
        match outs.get(read) {
            None => {
                outs.insert(read, cols);
            }
            Some(first) => assert_eq!(&cols, first, "{unit} against {read}"),
        }
    }
    // `--unit` reads it too, as the header's own unit respelled (no warning of a change).
    let o = segment(
        dir,
        "m0.fits",
        "opt",
        &["--wavelength", "850um", "-q", "--unit", "beam-1 Jy"],
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!o.stderr.contains("warning"), "{}", o.stderr);
    assert_eq!(
        catalogue_columns(&dir.join("opt/structures.csv")),
        outs["Jy/beam"]
    );
}

/// `--unit mJy/arcsec2` (and `mJy/arcsec**2`, `mJy arcsec-2`) is a surface brightness per
/// square arcsecond: `inspect` reads it and says by how much it changes the header's MJy/sr,
/// 42.54517029615221 times larger (1e-3 (648000/pi)^2 / 1e6, computed by hand from the
/// arcsecond's definition, pi/648000 rad, BIPM SI Brochure, 8th edition 2006, Table 6;
/// astropy 8.0.2's `(u.mJy / u.arcsec**2).to(u.MJy / u.sr)` gives 42.5451702961522), and a
/// misspelt square arcsecond is refused.
#[test]
fn the_unit_option_reads_a_surface_brightness_per_square_arcsecond() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let base = cairn::map::load(&dir.join("s/synth.fits"), &Default::default()).unwrap();
    let mut h = base.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("MJy/sr".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("sr.fits"), base.data.view(), &h, false).unwrap();
    for unit in [
        "mJy/arcsec2",
        "mJy/arcsec**2",
        "mJy arcsec-2",
        "arcsec-2 mJy",
    ] {
        let o = cairn(&["inspect", "sr.fits", "--json", "--unit", unit], dir);
        assert_eq!(o.code, 0, "{unit}: {}", o.stderr);
        let j: serde_json::Value = serde_json::from_str(&o.stdout).unwrap();
        assert_eq!(j["unit"], unit);
        assert_eq!(j["unit_kind"], "surface brightness");
        assert_eq!(j["unit_source"], "option");
        let w = j["warnings"].to_string();
        assert!(
            w.contains(&format!(
                "--unit '{unit}' replaces the header's BUNIT 'MJy/sr': every value is read as 42.5451702962 times larger"
            )),
            "{unit}: {w}"
        );
    }
    for unit in ["mJy/arcsec", "mJy arcsec2", "mJy/arcsec3"] {
        let args = ["inspect", "sr.fits", "--unit", unit];
        let o = cairn(&args, dir);
        check_refused(&o, &args, "--unit", "is not understood");
        assert!(o.stderr.contains("mJy/arcsec2"), "{}", o.stderr);
    }
}

/// `--unit` per square arcminute or per square degree (`Jy/arcmin2`, `MJy/deg2`, in each
/// spelling of the power): `inspect` reads it and says by how much it changes the header's
/// MJy/sr, 11.81810286 times larger for Jy/arcmin2 (1e-6 (10800/pi)^2, the arcminute being
/// pi/10800 rad), 84.6159499408 times smaller for mJy/arcmin2 and 3282.80635001 times larger
/// for MJy/deg2 ((180/pi)^2, the degree being pi/180 rad; BIPM SI Brochure, 8th edition 2006,
/// Table 6; astropy 8.0.2's `(u.Jy / u.arcmin**2).to(u.MJy / u.sr)` gives 11.818102860042279
/// and `(u.MJy / u.deg**2).to(u.MJy / u.sr)` 3282.8063500117437); a misspelt one is refused
/// with the list of units, which names both.
#[test]
fn the_unit_option_reads_a_surface_brightness_per_square_arcminute_and_degree() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    maps(dir);
    let base = cairn::map::load(&dir.join("s/synth.fits"), &Default::default()).unwrap();
    let mut h = base.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("MJy/sr".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("sr.fits"), base.data.view(), &h, false).unwrap();
    for (unit, change) in [
        ("Jy/arcmin2", "11.81810286 times larger"),
        ("Jy/arcmin**2", "11.81810286 times larger"),
        ("Jy arcmin-2", "11.81810286 times larger"),
        ("arcmin-2 Jy", "11.81810286 times larger"),
        ("mJy/arcmin2", "84.6159499408 times smaller"),
        ("MJy/deg2", "3282.80635001 times larger"),
        ("MJy deg-2", "3282.80635001 times larger"),
        ("deg-2 MJy", "3282.80635001 times larger"),
        ("MJY/DEG**2", "3282.80635001 times larger"),
    ] {
        let o = cairn(&["inspect", "sr.fits", "--json", "--unit", unit], dir);
        assert_eq!(o.code, 0, "{unit}: {}", o.stderr);
        let j: serde_json::Value = serde_json::from_str(&o.stdout).unwrap();
        assert_eq!(j["unit"], unit);
        assert_eq!(j["unit_kind"], "surface brightness");
        assert_eq!(j["unit_source"], "option");
        let w = j["warnings"].to_string();
        assert!(
            w.contains(&format!(
                "--unit '{unit}' replaces the header's BUNIT 'MJy/sr': every value is read as {change}"
            )),
            "{unit}: {w}"
        );
    }
    for unit in ["Jy/arcmin", "Jy arcmin2", "MJy/deg", "MJy deg-1", "deg-2"] {
        let args = ["inspect", "sr.fits", "--unit", unit];
        let o = cairn(&args, dir);
        check_refused(&o, &args, "--unit", "is not understood");
        assert!(
            o.stderr.contains("Jy/arcmin2") && o.stderr.contains("MJy/deg2"),
            "{}",
            o.stderr
        );
    }
}

//! Option values and run conditions met in use, on the demo column-density map: a beam far
//! wider than the map, an output folder whose name is not UTF-8, a reader that stops reading
//! early, a floor in sigma counted from the background as the default floor is, values of the
//! wrong kind named as such, figure options checked even when no figure is drawn, and the
//! limits that keep a mistyped number from taking the machine's memory or hours of its time.
//! Refusals keep the rule of tests/common/cli.rs (exit 2, one sentence, no panic, nothing on
//! stdout).

#[path = "common/cli.rs"]
mod cli;

use cli::{cairn, check_refused, demo_run, listing};
use std::path::{Path, PathBuf};

fn demo_map(dir: &Path) -> PathBuf {
    let to = dir.join("col.fits");
    std::fs::copy(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits"),
        &to,
    )
    .unwrap();
    to
}

/// Refused by the rule, with nothing left in the folder but what was there.
fn refused(dir: &Path, args: &[&str], names: &str, says: &str) {
    let before = listing(dir);
    let o = cairn(args, dir);
    check_refused(&o, args, names, says);
    assert_eq!(listing(dir), before, "{args:?}: nothing written");
}

fn run_json(dir: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(dir.join("run.json")).unwrap()).unwrap()
}

#[test]
fn a_beam_wider_than_the_map_is_no_crash() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    // A beam larger than the map says nothing of the noise's scale: the background's boxes
    // take their size without it, and inspect still describes the map.
    let o = cairn(&["inspect", "col.fits", "--beam", "1e10arcsec"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(o.stdout.contains("noise"), "{}", o.stdout);
    // segment refuses such a map plainly, with or without a --min-area of its own.
    for extra in [&[][..], &["--min-area", "12px"][..]] {
        let mut args = vec!["segment", "col.fits", "-o", "out", "--beam", "20deg"];
        args.extend_from_slice(extra);
        refused(d.path(), &args, "--beam", "larger than the whole map");
    }
}

#[cfg(unix)]
#[test]
fn an_output_folder_not_named_in_utf8_is_refused() {
    use std::os::unix::ffi::OsStrExt;
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    let name = std::ffi::OsStr::from_bytes(b"out\xff");
    let before = listing(d.path());
    let o = cli::outcome_of(
        std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args(["segment", "col.fits", "-o"])
            .arg(name)
            .current_dir(d.path()),
    );
    check_refused(
        &o,
        &["segment", "-o", "out\\xff"],
        "out",
        "is not a UTF-8 name",
    );
    assert_eq!(listing(d.path()), before);
}

/// A map whose file name is not UTF-8 is segmented, its run record keeps the exact path (as
/// bytes beside the readable text), and `draw` finds the map from the record alone.
#[test]
fn a_map_not_named_in_utf8_is_found_again_by_draw() {
    use std::os::unix::ffi::OsStrExt;
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    let name = std::ffi::OsStr::from_bytes(b"col\xff.fits");
    std::fs::rename(d.path().join("col.fits"), d.path().join(name)).unwrap();
    let o = cli::outcome_of(
        std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
            .arg("segment")
            .arg(name)
            .args(["-o", "out", "--no-figure", "-q"])
            .current_dir(d.path()),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let input = &run_json(&d.path().join("out"))["input"];
    let bytes: Vec<u8> = input["path_bytes"]
        .as_array()
        .expect("path_bytes for a name that is not UTF-8")
        .iter()
        .map(|v| v.as_u64().unwrap() as u8)
        .collect();
    assert!(bytes.ends_with(b"/col\xff.fits"), "{bytes:?}");
    assert!(input["path"].as_str().unwrap().ends_with(".fits"));
    let o = cairn(&["draw", "out", "-o", "figs", "-q"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(d.path().join("figs").is_dir());
    // A UTF-8 name keeps the text alone.
    demo_map(d.path());
    let o = cairn(
        &["segment", "col.fits", "-o", "plain", "--no-figure", "-q"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let input = &run_json(&d.path().join("plain"))["input"];
    assert!(input.get("path_bytes").is_none());
    assert!(input["path"].as_str().unwrap().ends_with("/col.fits"));
}

/// A map whose name holds a line break gives a catalogue whose commented header stays one
/// line per parameter (the break written as `\n`), which `draw` and `compare` read back.
#[test]
fn a_line_break_in_the_map_name_keeps_the_catalogue_readable() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    std::fs::rename(d.path().join("col.fits"), d.path().join("a\nb.fits")).unwrap();
    for name in ["one", "two"] {
        let mut args = vec!["segment", "a\nb.fits", "-o", name];
        args.extend_from_slice(&cli::DEMO_RUN);
        let o = cairn(&args, d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let csv = std::fs::read_to_string(d.path().join("one/structures.csv")).unwrap();
    assert!(
        csv.contains("# parameter input = a\\nb.fits  (input map)\n"),
        "{csv}"
    );
    let o = cairn(&["draw", "one", "-o", "figs", "-q"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(
        &[
            "compare",
            "one",
            "two",
            "-o",
            "cmp",
            "--resamples",
            "20",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
}

#[test]
fn a_reader_that_stops_early_is_not_an_error() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    // The pipe's reading end is closed before cairn writes: its writes then fail with a
    // broken pipe, which must neither panic nor fail the run.
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(["segment", "col.fits", "-o", "out", "--no-figure"])
        .current_dir(d.path())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let out = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(d.path().join("out/structures.csv").is_file());
}

#[test]
fn a_floor_in_sigma_counts_from_the_background_as_the_default_does() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    for (out, extra) in [("a", None), ("b", Some("3sigma")), ("c", Some("5sigma"))] {
        let mut args = vec!["segment", "col.fits", "-o", out, "--no-figure", "-q"];
        if let Some(f) = extra {
            args.extend(["--floor", f]);
        }
        let o = cairn(&args, d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let (a, b, c) = (
        run_json(&d.path().join("a")),
        run_json(&d.path().join("b")),
        run_json(&d.path().join("c")),
    );
    let floor = |r: &serde_json::Value| r["parameters"]["floor"]["value"].as_f64().unwrap();
    let noise = a["noise"]["value"].as_f64().unwrap();
    let background = b["noise"]["background"].as_f64().unwrap();
    // The default floor is 3 sigma above the background (README, Thresholds); 3sigma is it.
    assert_eq!(floor(&a), floor(&b));
    assert!(
        background > 10.0 * noise,
        "a map with a background well above its noise"
    );
    let five = background + 5.0 * noise;
    assert!((floor(&c) - five).abs() <= 1e-12 * five);
}

#[test]
fn values_of_the_wrong_kind_are_named() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    refused(
        d.path(),
        &["segment", "col.fits", "-o", "out", "--floor", "3K"],
        "--floor '3K'",
        "is a temperature, not a level of this map",
    );
    refused(
        d.path(),
        &[
            "segment",
            "col.fits",
            "-o",
            "out",
            "--prominence",
            "0.05MJy/sr",
        ],
        "--prominence '0.05MJy/sr'",
        "not a level of this map",
    );
    // Given as written, not converted to metres.
    refused(
        d.path(),
        &["segment", "col.fits", "-o", "out", "--distance", "-410pc"],
        "--distance -410pc",
        "must be positive",
    );
}

#[test]
fn figure_options_are_checked_without_a_figure_too() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    refused(
        d.path(),
        &[
            "segment",
            "col.fits",
            "-o",
            "out",
            "--no-figure",
            "--colormap",
            "jet",
        ],
        "--colormap 'jet'",
        "not understood",
    );
    // A negative percentile reaches cairn's own check, not the parser's advice about '--'.
    refused(
        d.path(),
        &["segment", "col.fits", "-o", "out", "--limits", "-5,200"],
        "--limits -5,200",
        "0 <= low < high <= 100",
    );
    for (option, value) in [
        ("--limits", "99,1"),
        ("--range", "5,1"),
        ("--range", "nan,1"),
    ] {
        refused(
            d.path(),
            &[
                "segment",
                "col.fits",
                "-o",
                "out",
                "--no-figure",
                option,
                value,
            ],
            option,
            "LOW,HIGH",
        );
    }
    // Too narrow for its text at that resolution, with or without a figure.
    for extra in [&[][..], &["--no-figure"][..]] {
        let mut args = vec![
            "segment", "col.fits", "-o", "out", "--width", "250", "--dpi", "2400",
        ];
        args.extend_from_slice(extra);
        refused(d.path(), &args, "--width 250 at --dpi 2400", "at least");
    }
}

#[test]
fn an_empty_result_names_every_threshold_that_may_be_the_cause() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    let o = cairn(
        &[
            "segment",
            "col.fits",
            "-o",
            "out",
            "--floor",
            "7e22",
            "--min-area",
            "100",
            "--no-figure",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout
            .contains("lower --floor, --prominence or --min-area"),
        "{}",
        o.stdout
    );
    assert!(!o.stdout.contains("leaves by state"), "{}", o.stdout);
}

#[test]
fn synth_without_random_cores_needs_no_margin() {
    let d = tempfile::tempdir().unwrap();
    let o = cairn(
        &[
            "synth", "-o", "thin", "--size", "300x7", "--cores", "0", "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    refused(
        d.path(),
        &["synth", "-o", "small", "--size", "20", "--cores", "3"],
        "20 x 20 pixels",
        "give a --size of at least 22 pixels on each side",
    );
}

#[test]
fn compare_refuses_values_that_would_exhaust_the_machine() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    for run in ["run", "run2"] {
        demo_run(d.path(), run, &[]);
    }
    // Without the bounds, 1e-9 dex bins asked for 190 GB and a million resamples ran for
    // minutes with nothing to show.
    refused(
        d.path(),
        &["compare", "run", "run2", "-o", "c", "--bin-width", "1e-9"],
        "--bin-width",
        "outside 0.01 to 2 dex",
    );
    refused(
        d.path(),
        &[
            "compare",
            "run",
            "run2",
            "-o",
            "c",
            "--resamples",
            "1000000",
        ],
        "--resamples 1000000",
        "give at most 100000",
    );
    // A search window for the tail's exponent must leave room above 1 (a law with alpha <= 1
    // cannot be normalised, Clauset, Shalizi & Newman 2009 eq. 2.2) and stay finite.
    for bad in ["1", "0.5", "11", "inf"] {
        refused(
            d.path(),
            &["compare", "run", "run2", "-o", "c", "--alpha-max", bad],
            &format!("--alpha-max {bad}"),
            "above 1, at most 10",
        );
    }
}

/// A run killed outright (out of memory, `kill -9`) runs no handler and leaves its temporary
/// files; the next run in that folder removes those of cairn's output names whose process is
/// gone, and leaves a running process's and any other file.
#[cfg(unix)]
#[test]
fn leftovers_of_a_killed_run_are_removed_by_the_next() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    let out = d.path().join("out");
    std::fs::create_dir(&out).unwrap();
    // A process that has ended: its id is free (reused within milliseconds only by chance).
    let mut gone = std::process::Command::new("true").spawn().unwrap();
    let dead = gone.id();
    gone.wait().unwrap();
    let alive = std::process::id();
    let files = [
        format!(".structures.csv.partial-{dead}-0"),
        format!("..labels.fits.partial-{dead}-3.part-{dead}"),
        format!(".structures.csv.partial-{alive}-0"),
        format!(".notes.txt.partial-{dead}-0"),
    ];
    for f in &files {
        std::fs::write(out.join(f), b"unfinished").unwrap();
    }
    let o = cairn(
        &["segment", "col.fits", "-o", "out", "--no-figure", "-q"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!out.join(&files[0]).exists() && !out.join(&files[1]).exists());
    assert!(
        out.join(&files[2]).exists(),
        "a running process's file stays"
    );
    assert!(
        out.join(&files[3]).exists(),
        "not one of cairn's output names"
    );
}

/// The auxiliary maps' BUNIT is read: a velocity-dispersion map in m/s and a noise map in m-2
/// beside a map in cm-2 are converted (the catalogue's columns equal those of the same values
/// given as numbers in km/s and cm-2), and a temperature map in cm-2 is refused naming it.
#[test]
fn auxiliary_maps_are_read_in_their_own_units() {
    use cairn::header::Value;
    let d = tempfile::tempdir().unwrap();
    let map_path = demo_map(d.path());
    let m = cairn::map::load(&map_path, &Default::default()).unwrap();
    let write = |name: &str, value: f32, bunit: &str| {
        let mut h = m.header.clone();
        h.set("BUNIT", Value::Str(bunit.into()), "");
        let a = ndarray::Array2::from_elem(m.data.dim(), value);
        cairn::fits_write::write_image_f32(&d.path().join(name), a.view(), &h, true).unwrap();
    };
    write("sigma.fits", 200.0, "m/s");
    write("noise.fits", 2.0e24, "m-2");
    write("temp.fits", 14.0, "cm-2");
    let mut base = vec!["segment", "col.fits"];
    base.extend_from_slice(&cli::DEMO_RUN);
    let column = |run: &str, col: &str| -> Vec<f64> {
        let text = std::fs::read_to_string(d.path().join(run).join("structures.csv")).unwrap();
        let mut lines = text.lines().filter(|l| !l.starts_with('#'));
        let i = lines
            .next()
            .unwrap()
            .split(',')
            .position(|c| c == col)
            .unwrap();
        lines
            .map(|l| l.split(',').nth(i).unwrap().parse().unwrap())
            .collect()
    };
    let run = |name: &str, extra: &[&str]| {
        let mut args = base.clone();
        args.extend(["-o", name]);
        args.extend_from_slice(extra);
        let o = cairn(&args, d.path());
        assert_eq!(o.code, 0, "{name}: {}", o.stderr);
    };
    run("given", &["--sigma-nt", "0.2km/s", "--noise", "2e20"]);
    run(
        "maps",
        &["--sigma-nt-map", "sigma.fits", "--noise-map", "noise.fits"],
    );
    for col in ["alpha_vir", "sigma_v", "mass_err", "n_peak_err"] {
        let (a, b) = (column("given", col), column("maps", col));
        assert!(!a.is_empty());
        for (x, y) in a.iter().zip(&b) {
            assert!((x - y).abs() <= 1e-6 * x.abs(), "{col}: {x} {y}");
        }
    }
    let mut args = base.clone();
    args.extend(["-o", "bad", "--temperature-map", "temp.fits"]);
    args.retain(|a| *a != "--temperature" && *a != "14K");
    refused(
        d.path(),
        &args,
        "temp.fits",
        "has BUNIT 'cm-2', but a temperature map must be in K",
    );
}

/// Temperatures colder than the cosmic microwave background (2.7255 K: astropy 8.0.2's
/// `Planck18.Tcmb0`, Fixsen 2009) are mistakes: given as `--temperature` or as a pixel of a
/// temperature map (named by its position), they are refused. Before, 0.025 K on an
/// emission map gave infinite masses without a word (the Planck function underflows).
#[test]
fn temperatures_colder_than_the_microwave_background_are_refused() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    refused(
        d.path(),
        &[
            "segment",
            "col.fits",
            "-o",
            "out",
            "--distance",
            "300pc",
            "--temperature",
            "0.025K",
        ],
        "--temperature 0.025K",
        "colder than the cosmic microwave background (2.7255 K)",
    );
    let m = cairn::map::load(&d.path().join("col.fits"), &Default::default()).unwrap();
    let mut h = m.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("K".into()), "");
    let mut t = m.data.mapv(|_| 14.0f32);
    t[(7, 11)] = 0.5;
    cairn::fits_write::write_image_f32(&d.path().join("t.fits"), t.view(), &h, true).unwrap();
    refused(
        d.path(),
        &[
            "segment",
            "col.fits",
            "-o",
            "out",
            "--distance",
            "300pc",
            "--temperature-map",
            "t.fits",
        ],
        "t.fits",
        "holds 0.5 K at pixel (11, 7), colder than the cosmic microwave background",
    );
    refused(
        d.path(),
        &["segment", "col.fits", "-o", "out", "--temperature", "1e9K"],
        "--temperature 1e9K",
        "hotter than dust survives",
    );
    // The opacity's frequency lies where dust continuum is measured, 1 um to 10 m inclusive.
    refused(
        d.path(),
        &[
            "segment",
            "col.fits",
            "-o",
            "out",
            "--opacity-frequency",
            "11m",
        ],
        "--opacity-frequency 11m",
        "is outside 300THz to 30MHz (1um to 10m)",
    );
    for f in ["10m", "1um"] {
        let o = cairn(
            &[
                "segment",
                "col.fits",
                "-o",
                f,
                "--opacity-frequency",
                f,
                "--no-figure",
                "-q",
            ],
            d.path(),
        );
        assert_eq!(o.code, 0, "{f}: {}", o.stderr);
    }
    // The background itself is accepted.
    let o = cairn(
        &[
            "segment",
            "col.fits",
            "-o",
            "ok",
            "--distance",
            "300pc",
            "--temperature",
            "2.7255K",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
}

/// `inspect --noise` ten times or more away from the map's pixel-difference estimate (4
/// meant as mJy/beam on the demo map in Jy/beam, whose estimate is about 0.004) is questioned
/// with the ratio and the unit a bare value is read in; a noise near the estimate is not.
#[test]
fn inspect_questions_a_noise_far_from_the_maps_own() {
    let d = tempfile::tempdir().unwrap();
    let map = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let map = map.to_str().unwrap();
    let o = cairn(&["inspect", map, "--noise", "4"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let all = format!("{}{}", o.stdout, o.stderr);
    assert!(
        all.contains("warning: the noise given (4) is ")
            && all.contains(" times the pixel-difference estimate")
            && all.contains("a bare --noise is in the map's unit, Jy/beam"),
        "{all}"
    );
    let o = cairn(&["inspect", map, "--noise", "0.004"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!format!("{}{}", o.stdout, o.stderr).contains("noise given"));
}

/// A side map beside the demo map, of `value` everywhere but `odd` at pixel (x 11, y 7),
/// with BUNIT `bunit` (none when empty).
fn side_map(dir: &Path, name: &str, value: f32, odd: f32, bunit: &str) {
    use cairn::header::Value;
    let m = cairn::map::load(&dir.join("col.fits"), &Default::default()).unwrap();
    let mut h = m.header.clone();
    if bunit.is_empty() {
        h.remove("BUNIT");
    } else {
        h.set("BUNIT", Value::Str(bunit.into()), "");
    }
    let mut a = ndarray::Array2::from_elem(m.data.dim(), value);
    a[(7, 11)] = odd;
    cairn::fits_write::write_image_f32(&dir.join(name), a.view(), &h, true).unwrap();
}

/// The temperature and velocity-dispersion maps are held to the limits of --temperature and
/// --sigma-nt: a pixel beyond them is refused by its position and value, with a hint at mK or
/// m/s where the values look like them; a dispersion map above the warning's limit is run
/// with a warning (kept in the run record); --sigma-nt itself is refused faster than 1000
/// km/s and warned about above 50 km/s; a dispersion map with no value is refused as a
/// temperature map with none is.
#[test]
fn side_maps_are_held_to_the_limits_of_their_options() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    let base = ["segment", "col.fits", "--distance", "410pc"];
    let with = |extra: &[&str]| -> Vec<String> {
        base.iter()
            .chain(extra)
            .map(|s| s.to_string())
            .collect::<Vec<_>>()
    };
    let refused_with = |extra: &[&str], names: &str, says: &str| {
        let mut args = with(extra);
        args.extend(["-o".to_string(), "out".to_string()]);
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        refused(d.path(), &args, names, says);
    };
    // mK written without BUNIT (read in K), and K values beyond any dust.
    side_map(d.path(), "t_mk.fits", 14000.0, 15000.0, "");
    refused_with(
        &["--temperature-map", "t_mk.fits"],
        "t_mk.fits",
        "holds 15000 K at pixel (11, 7), hotter than dust survives",
    );
    refused_with(
        &["--temperature-map", "t_mk.fits"],
        "t_mk.fits",
        "look like millikelvin (15000 mK is 15 K)",
    );
    side_map(d.path(), "t_hot.fits", 14.0, 1e6, "K");
    refused_with(
        &["--temperature-map", "t_hot.fits"],
        "t_hot.fits",
        "holds 1000000 K at pixel (11, 7), hotter than dust survives",
    );
    // m/s written without BUNIT (read in km/s): refused past 1000, warned about past 50.
    side_map(d.path(), "s_fast.fits", 300.0, 1e20, "km/s");
    refused_with(
        &["--temperature", "14K", "--sigma-nt-map", "s_fast.fits"],
        "s_fast.fits",
        "holds 1e20 km/s at pixel (11, 7), faster than any gas motion in a molecular cloud",
    );
    side_map(d.path(), "s_ms.fits", 200.0, 1500.0, "");
    refused_with(
        &["--temperature", "14K", "--sigma-nt-map", "s_ms.fits"],
        "s_ms.fits",
        "its values look like m/s (1500 m/s is 1.5 km/s)",
    );
    side_map(d.path(), "s_slow.fits", 200.0, 300.0, "");
    let args = with(&[
        "--temperature",
        "14K",
        "--sigma-nt-map",
        "s_slow.fits",
        "-o",
        "out",
        "--no-figure",
        "-q",
    ]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let said = "the velocity-dispersion map s_slow.fits holds up to 300 km/s (at pixel (11, 7))";
    assert!(
        o.stderr.contains(said) && o.stderr.contains("look like m/s (300 m/s is 0.3 km/s)"),
        "{}",
        o.stderr
    );
    let record = run_json(&d.path().join("out"));
    assert!(
        record["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap().contains(said)),
        "{record}"
    );
    // Every pixel undefined: no structure could have a virial parameter.
    side_map(d.path(), "s_nan.fits", f32::NAN, f32::NAN, "km/s");
    refused_with(
        &["--temperature", "14K", "--sigma-nt-map", "s_nan.fits"],
        "s_nan.fits",
        "has no defined pixel (all are NaN), so no structure would have a virial parameter",
    );
    // The option itself.
    refused_with(
        &["--sigma-nt", "400000km/s"],
        "--sigma-nt 400000km/s",
        "faster than any gas motion in a molecular cloud (above 1000 km/s)",
    );
    let args = with(&["--sigma-nt", "300km/s", "-o", "warned", "--no-figure", "-q"]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr
            .contains("warning: --sigma-nt 300km/s is more than the non-thermal dispersions"),
        "{}",
        o.stderr
    );
    let args = with(&["--sigma-nt", "0.3km/s", "-o", "quiet", "--no-figure", "-q"]);
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let o = cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!o.stderr.contains("sigma-nt"), "{}", o.stderr);
}

/// `segment` questions a `--noise` far from the map's pixel-difference estimate as `inspect`
/// does, in the same words, and both question a `--noise-map` whose median is; the ratio is
/// said in scientific notation, not as a fraction of thirty digits.
#[test]
fn segment_and_inspect_question_a_noise_far_from_the_maps_own() {
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    side_map(d.path(), "n_tiny.fits", 1e-30, 1e-30, "");
    for (how, noise, out) in [
        ("--noise", "1e-30", "n1"),
        ("--noise-map", "n_tiny.fits", "n2"),
    ] {
        let said = match how {
            "--noise" => "warning: the noise given (1e-30) is about ".to_string(),
            _ => "warning: the noise map n_tiny.fits (median 1e-30) is about ".to_string(),
        };
        let i = cairn(&["inspect", "col.fits", how, noise], d.path());
        assert_eq!(i.code, 0, "{}", i.stderr);
        let s = cairn(
            &[
                "segment",
                "col.fits",
                "-o",
                out,
                how,
                noise,
                "--no-figure",
                "-q",
            ],
            d.path(),
        );
        assert_eq!(s.code, 0, "{}", s.stderr);
        let line = |text: &str| {
            text.lines()
                .find(|l| l.starts_with(&said))
                .unwrap_or_else(|| panic!("{how}: no warning in {text}"))
                .to_string()
        };
        let (a, b) = (line(&format!("{}{}", i.stdout, i.stderr)), line(&s.stderr));
        // The same sentence, but for the estimate's digits: segment takes it from a sample
        // of the map's rows (enough for a factor of a hundred), inspect from the whole map.
        let words = |l: &str| -> String {
            l.split_whitespace()
                .filter(|w| !w.chars().any(|c| c.is_ascii_digit()))
                .collect::<Vec<_>>()
                .join(" ")
        };
        assert_eq!(words(&a), words(&b));
        // The ratio, about 1e-50 on this map, in scientific notation.
        let ratio: f64 = a[said.len()..]
            .split_whitespace()
            .next()
            .unwrap()
            .parse()
            .unwrap();
        assert!(ratio > 1e-52 && ratio < 1e-49, "{a}");
        assert!(!a.contains("0000000000"), "{a}");
    }
}

/// A map whose figure needs more room than the widest figure cairn draws (a reference pixel
/// at -1e308 makes every axis label enormous) is refused before any work without sending the
/// user to a larger --width, and without speaking of a --width that was not given; the
/// message offers --no-figure, which then runs.
#[test]
fn a_figure_wider_than_any_width_is_refused_with_a_way_out() {
    use cairn::header::Value;
    let d = tempfile::tempdir().unwrap();
    demo_map(d.path());
    let m = cairn::map::load(&d.path().join("col.fits"), &Default::default()).unwrap();
    let mut h = m.header.clone();
    h.set("CRPIX2", Value::Float(-1e308), "");
    cairn::fits_write::write_image_f32(&d.path().join("odd.fits"), m.data.view(), &h, true)
        .unwrap();
    let o = cairn(&["segment", "odd.fits", "-o", "out", "-q"], d.path());
    assert!(!d.path().join("out").exists());
    assert_eq!(o.code, 2, "{}", o.stderr);
    let last = o.stderr.trim_end().lines().last().unwrap().to_string();
    assert!(
        last.contains("the default figure width (1600 pixels)")
            && last.contains("more than the widest cairn draws (20000)")
            && last.contains("--no-figure")
            && !last.contains("--width 1600")
            && !last.contains("larger --width"),
        "{last}"
    );
    let o = cairn(
        &["segment", "odd.fits", "-o", "out", "-q", "--width", "3000"],
        d.path(),
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(
        o.stderr.contains("--width 3000 at --dpi 300") && !o.stderr.contains("larger --width"),
        "{}",
        o.stderr
    );
    assert!(!d.path().join("out").exists());
    let o = cairn(
        &["segment", "odd.fits", "-o", "out", "-q", "--no-figure"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
}

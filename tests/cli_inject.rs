//! `cairn synth --into` and `cairn compare --truth` end to end, on invented maps made by
//! `cairn synth`: bright isolated injected cores are recovered, the input map is left as it
//! was, the injection does not depend on the number of threads, and bad input is refused
//! with one sentence and nothing written.
//!
//! These are consistency checks on synthetic data (recovery of injected cores, determinism);
//! the outside references of the injection and the scoring are in `tests/inject_reference.rs`.

#[path = "common/cli.rs"]
mod cli;

use cli::{cairn, check_refused};
use std::path::Path;

/// A column-density map of an invented cloud (log-normal background, white noise of 1e20
/// cm-2, 18" beam on 6" pixels), made by `cairn synth` in `dir/base`.
fn base_map(dir: &Path) {
    let o = cairn(
        &[
            "synth", "-o", "base", "--size", "256", "--noise", "1e20cm-2", "--seed", "3", "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
}

const INJECT: [&str; 9] = [
    "--distance",
    "250pc",
    "--cores",
    "30",
    "--core-mass",
    "3Msun,10Msun",
    "--core-radius",
    "0.02pc,0.04pc",
    "-q",
];

fn inject(dir: &Path, map: &str, out: &str, extra: &[&str]) -> cli::Outcome {
    let mut args = vec!["synth", "--into", map, "-o", out];
    args.extend_from_slice(&INJECT);
    args.extend_from_slice(extra);
    cairn(&args, dir)
}

/// Segments `map` into `run` (with `--no-figure -q` and `segment_args`) and scores that run
/// against `truth` into `out` (`-q`); both must succeed. Returns the scoring's outcome.
fn segment_and_score(
    dir: &Path,
    map: &str,
    run: &str,
    segment_args: &[&str],
    truth: &str,
    out: &str,
) -> cli::Outcome {
    let mut args = vec!["segment", map, "-o", run, "--no-figure", "-q"];
    args.extend_from_slice(segment_args);
    let o = cairn(&args, dir);
    assert_eq!(o.code, 0, "{args:?}: {}", o.stderr);
    let o = cairn(&["compare", run, "--truth", truth, "-o", out, "-q"], dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    o
}

/// Rows of a CSV written by cairn (the `#` lines skipped): the header and the cells.
fn csv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let head: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    (head, rows)
}

fn column(head: &[String], name: &str) -> usize {
    head.iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("no column {name}"))
}

/// The unbinned logistic fit, made again from `scored`/matches.csv's outcomes (a run without
/// a baseline, so every core counts), is the one that its completeness.csv's parameters, its
/// report and the command's `stdout` give (or their reason for none).
fn logistic_fit_is_reported(dir: &Path, scored: &str, stdout: &str, report: &str) {
    let (mh, matches) = csv(&dir.join(scored).join("matches.csv"));
    let (true_mass, leaf) = (column(&mh, "true_mass"), column(&mh, "leaf"));
    let masses: Vec<f64> = matches
        .iter()
        .map(|m| m[true_mass].parse().unwrap())
        .collect();
    let outcomes: Vec<bool> = matches.iter().map(|m| !m[leaf].is_empty()).collect();
    let fit = cairn::completeness::logistic_fit(&masses, &outcomes);
    let table = std::fs::read_to_string(dir.join(scored).join("completeness.csv")).unwrap();
    let param = |k: &str| -> String {
        let lead = format!("# parameter {k} = ");
        let line = table.lines().find_map(|l| l.strip_prefix(lead.as_str()));
        let line = line.unwrap_or_else(|| panic!("no parameter {k}"));
        line.split("  (").next().unwrap().to_string()
    };
    match &fit {
        Ok(f) => {
            assert_eq!(param("logistic_m90").parse::<f64>().unwrap(), f.m90());
            assert_eq!(param("logistic_b").parse::<f64>().unwrap(), f.b);
            assert_eq!(param("logistic_no_fit"), "");
            let line = format!(
                "**Unbinned 90% completeness (logistic fit)**: **{} Msun**",
                cairn::completeness::fmt_msun(f.m90())
            );
            assert!(report.contains(&line), "{line}\n{report}");
            assert!(
                report.contains("it does not depend on the bins"),
                "{report}"
            );
            let said = format!(
                "unbinned logistic fit: 90% at {} Msun",
                cairn::completeness::fmt_msun(f.m90())
            );
            assert!(stdout.contains(&said), "{said}\n{stdout}");
            // A slope within two standard errors of zero is named as a weak fit, in the
            // report and on stdout alike.
            assert_eq!(report.contains("**The fit is weak"), f.weak(), "{report}");
            assert_eq!(param("logistic_weak"), f.weak().to_string());
            assert_eq!(stdout.contains("a weak fit"), f.weak(), "{stdout}");
        }
        Err(why) => {
            assert_eq!(param("logistic_no_fit"), why.to_string());
            assert_eq!(param("logistic_m90"), "");
            assert!(report.contains(&why.to_string()), "{report}");
            assert!(stdout.contains("no unbinned logistic fit"), "{stdout}");
        }
    }
}

#[test]
fn bright_isolated_injected_cores_are_recovered_and_the_input_is_untouched() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let before = std::fs::read(dir.join("base/synth.fits")).unwrap();
    let o = inject(dir, "base/synth.fits", "inj", &["--seed", "5"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert_eq!(
        std::fs::read(dir.join("base/synth.fits")).unwrap(),
        before,
        "the input map is byte-identical after injection"
    );
    for f in ["synth.fits", "synth-truth.csv", "synth-spec.json"] {
        assert!(dir.join("inj").join(f).is_file(), "{f}");
    }
    // The injected map keeps the input's header (its WCS and beam) and says what was added.
    let input = cairn::map::load(
        &dir.join("base/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    let injected = cairn::map::load(
        &dir.join("inj/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    assert_eq!(injected.beam, input.beam);
    assert_eq!(injected.unit_text, input.unit_text);
    for key in [
        "CTYPE1", "CTYPE2", "CRVAL1", "CRVAL2", "CRPIX1", "CRPIX2", "CDELT1", "CDELT2",
    ] {
        assert_eq!(injected.header.get(key), input.header.get(key), "{key}");
    }
    let history: Vec<&str> = injected
        .header
        .cards()
        .iter()
        .filter(|c| c.key == "HISTORY")
        .map(|c| c.comment.as_str())
        .collect();
    assert!(
        history
            .iter()
            .any(|h| h.contains("injected 30 synthetic cores")),
        "{history:?}"
    );
    // Injection only adds: every pixel is at least the input's (to 32-bit rounding).
    assert!(
        injected
            .data
            .iter()
            .zip(input.data.iter())
            .all(|(a, b)| *a >= *b * (1.0 - 1e-6)),
        "injection only adds"
    );
    let o = segment_and_score(
        dir,
        "inj/synth.fits",
        "run",
        &["--distance", "250pc", "--temperature", "12K"],
        "inj/synth-truth.csv",
        "score",
    );

    // Peak signal-to-noise of each injected core alone: its beam-convolved peak (truth table)
    // over the noise the run used (run.json).
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("run/run.json")).unwrap()).unwrap();
    let noise = run["noise"]["value"].as_f64().unwrap();
    let (th, truth) = csv(&dir.join("inj/synth-truth.csv"));
    let (mh, matches) = csv(&dir.join("score/matches.csv"));
    assert_eq!(truth.len(), 30);
    assert_eq!(matches.len(), 30);
    let (peak, tid) = (column(&th, "peak"), column(&th, "id"));
    let (mid, leaf, offset_beams) = (
        column(&mh, "id"),
        column(&mh, "leaf"),
        column(&mh, "offset_beams"),
    );
    let mut bright = 0;
    let mut found = 0;
    for t in &truth {
        let snr = t[peak].parse::<f64>().unwrap() / noise;
        if snr < 10.0 {
            continue;
        }
        bright += 1;
        let m = matches.iter().find(|m| m[mid] == t[tid]).unwrap();
        if !m[leaf].is_empty() {
            found += 1;
            let off: f64 = m[offset_beams].parse().unwrap();
            assert!((0.0..=1.0).contains(&off), "offset {off} beams");
        }
    }
    assert!(bright >= 20, "{bright} cores at peak S/N >= 10");
    assert!(
        found as f64 >= 0.95 * bright as f64,
        "{found} of {bright} bright isolated cores recovered"
    );
    // Each leaf matches at most one core.
    let mut leaves: Vec<&str> = matches
        .iter()
        .map(|m| m[leaf].as_str())
        .filter(|l| !l.is_empty())
        .collect();
    let n = leaves.len();
    leaves.sort();
    leaves.dedup();
    assert_eq!(leaves.len(), n, "one leaf per core");

    // completeness.csv counts what matches.csv says, and each fraction lies in its interval.
    let (ch, bins) = csv(&dir.join("score/completeness.csv"));
    let get = |r: &Vec<String>, c: &str| r[column(&ch, c)].parse::<f64>().unwrap_or(f64::NAN);
    let injected: f64 = bins.iter().map(|r| get(r, "injected")).sum();
    let recovered: f64 = bins.iter().map(|r| get(r, "recovered")).sum();
    assert_eq!(injected, 30.0);
    assert_eq!(recovered, n as f64);
    for r in &bins {
        if get(r, "injected") > 0.0 {
            let (f, lo, hi) = (
                get(r, "fraction"),
                get(r, "fraction_lo"),
                get(r, "fraction_hi"),
            );
            assert!(lo <= f && f <= hi, "{lo} {f} {hi}");
        }
    }
    let report = std::fs::read_to_string(dir.join("score/report.md")).unwrap();
    logistic_fit_is_reported(dir, "score", &o.stdout, &report);
    // The run used the injection's distance, and the other assumptions do not enter the
    // masses of a column-density map but mu_H2, left at its default on both sides.
    assert!(!report.contains("assumptions differ"), "{report}");
    assert!(!o.stderr.contains("warning"), "{}", o.stderr);
    // The truth of the synthetic base map holds no core: refused by name.
    let base_args = [
        "compare",
        "run",
        "--truth",
        "base/synth-truth.csv",
        "-o",
        "nobase",
    ];
    let o = cairn(&base_args, dir);
    check_refused(
        &o,
        &base_args,
        "base/synth-truth.csv",
        "holds no injected core",
    );
    assert!(!dir.join("nobase").exists());
    assert!(report.contains("# Completeness"), "{report}");
    assert!(report.contains("mass_excess"), "{report}");
    // Either a limit, or (every bin at 90% or more) completeness down to the least mass tried.
    assert!(
        report.contains("completeness limit")
            || report.contains("90% complete down to the least injected mass"),
        "{report}"
    );
}

#[test]
fn injection_is_byte_identical_with_one_and_two_threads() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let mut outs = Vec::new();
    for threads in ["1", "2"] {
        let out = format!("inj{threads}");
        let mut args = vec!["synth", "--into", "base/synth.fits", "-o", &out];
        args.extend_from_slice(&INJECT);
        let o = std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args(&args)
            .env("RAYON_NUM_THREADS", threads)
            .current_dir(dir)
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        outs.push(out);
    }
    for f in ["synth.fits", "synth-truth.csv", "synth-spec.json"] {
        let a = std::fs::read(dir.join(&outs[0]).join(f)).unwrap();
        let b = std::fs::read(dir.join(&outs[1]).join(f)).unwrap();
        assert!(!a.is_empty());
        assert!(a == b, "{f} differs between 1 and 2 threads");
    }
}

#[test]
fn bad_input_is_refused_in_one_sentence_with_nothing_written() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    // An emission map, a map without a beam, and a map without sky coordinates.
    for (name, extra) in [
        ("emission", &["--emission", "850um"][..]),
        ("nobeam", &["--beam", "0arcsec"][..]),
    ] {
        let mut args = vec!["synth", "-o", name, "--size", "128", "--seed", "4", "-q"];
        args.extend_from_slice(extra);
        let o = cairn(&args, dir);
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let mut h = cairn::header::Header::new();
    h.set("BUNIT", cairn::header::Value::Str("cm-2".into()), "");
    h.set("BMAJ", cairn::header::Value::Float(0.005), "");
    h.set("BMIN", cairn::header::Value::Float(0.005), "");
    let data = ndarray::Array2::<f32>::from_elem((128, 128), 1e21);
    cairn::fits_write::write_image_f32(&dir.join("nowcs.fits"), data.view(), &h, false).unwrap();

    // A map in a unit that holds no column density (a brightness temperature).
    let base = cairn::map::load(
        &dir.join("base/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    let mut h = base.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("K".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("kelvin.fits"), base.data.view(), &h, false)
        .unwrap();

    let cases: [(&str, &str, &str, &str); 5] = [
        (
            "kelvin.fits",
            "unit that is no column density",
            "kelvin.fits",
            "give --unit",
        ),
        (
            "emission/synth.fits",
            "unconvertible unit (no temperature)",
            "emission/synth.fits",
            "--temperature",
        ),
        (
            "nobeam/synth.fits",
            "no beam",
            "nobeam/synth.fits",
            "--beam",
        ),
        (
            "nowcs.fits",
            "no pixel scale",
            "nowcs.fits",
            "no celestial WCS",
        ),
        (
            "base/synth.fits",
            "cores that cannot be placed",
            "base/synth.fits",
            "fewer --cores",
        ),
    ];
    for (map, what, names, says) in cases {
        // Thirty cores at least 10 arcmin apart on a map 25.6 arcmin wide.
        let extra: &[&str] = if what.starts_with("cores") {
            &["--min-separation", "600arcsec"]
        } else {
            &[]
        };
        let mut args = vec!["synth", "--into", map, "-o", "out"];
        args.extend_from_slice(&INJECT);
        args.extend_from_slice(extra);
        let o = cairn(&args, dir);
        check_refused(&o, &args, names, says);
        assert!(!dir.join("out").exists(), "{what}: nothing written");
    }

    // Options that describe a synthetic map have no meaning with --into.
    let args = [
        "synth",
        "--into",
        "base/synth.fits",
        "-o",
        "out",
        "--distance",
        "250pc",
        "--cores",
        "3",
        "--size",
        "100",
    ];
    let o = cairn(&args, dir);
    check_refused(&o, &args, "--size", "cannot be used with");
    assert!(!dir.join("out").exists());

    // Two injections into the same map; a run of the first; the truth of the second.
    assert_eq!(
        inject(dir, "base/synth.fits", "a", &["--seed", "5"]).code,
        0
    );
    assert_eq!(
        inject(dir, "base/synth.fits", "b", &["--seed", "6"]).code,
        0
    );
    // An earlier injection is not replaced without --force.
    let truth_a = std::fs::read(dir.join("a/synth-truth.csv")).unwrap();
    let o = inject(dir, "base/synth.fits", "a", &["--seed", "7"]);
    check_refused(&o, &["synth", "--into", "-o", "a"], "a", "--force");
    assert_eq!(
        std::fs::read(dir.join("a/synth-truth.csv")).unwrap(),
        truth_a
    );
    let o = cairn(
        &[
            "segment",
            "a/synth.fits",
            "-o",
            "run",
            "--distance",
            "250pc",
            "--no-figure",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let args = [
        "compare",
        "run",
        "--truth",
        "b/synth-truth.csv",
        "-o",
        "out",
    ];
    let o = cairn(&args, dir);
    check_refused(&o, &args, "b/synth-truth.csv", "another map");
    assert!(!dir.join("out").exists());
    // A truth table whose map SHA-256 was edited into text that is not hexadecimal (here
    // with multi-byte characters) is refused the same way, not a crash.
    let text = std::fs::read_to_string(dir.join("a/synth-truth.csv")).unwrap();
    let edited: String = text
        .lines()
        .map(|l| match l.split_once(" sha256 ") {
            Some((head, _)) if l.starts_with("# map ") => {
                format!("{head} sha256 a\u{e9}\u{e9}\u{e9}\u{e9}\u{e9}\u{e9}\u{e9}\n")
            }
            _ => format!("{l}\n"),
        })
        .collect();
    assert_ne!(edited, text);
    std::fs::write(dir.join("edited-truth.csv"), edited).unwrap();
    let args = ["compare", "run", "--truth", "edited-truth.csv", "-o", "out"];
    let o = cairn(&args, dir);
    check_refused(&o, &args, "edited-truth.csv", "another map");
    assert!(!dir.join("out").exists());
    let args = [
        "compare",
        "run",
        "run",
        "--truth",
        "a/synth-truth.csv",
        "-o",
        "out",
    ];
    let o = cairn(&args, dir);
    check_refused(&o, &args, "--truth", "give one run folder");
    assert!(!dir.join("out").exists());
    // Options of the population comparison are refused with --truth rather than ignored.
    for (option, value) in [
        ("--label", "north"),
        ("--mass-column", "mass"),
        ("--mass-min", "1Msun"),
        ("--tests-above", "1Msun"),
        ("--alpha-max", "4"),
        ("--resamples", "50"),
        ("--seed", "7"),
        ("--be-temperatures", "15K"),
    ] {
        let args = [
            "compare",
            "run",
            "--truth",
            "a/synth-truth.csv",
            "-o",
            "out",
            option,
            value,
        ];
        let o = cairn(&args, dir);
        check_refused(&o, &args, option, "has no effect with --truth");
        assert!(!dir.join("out").exists());
    }
    // The truth written by plain synth scores a run of its own map.
    let o = cairn(
        &[
            "synth",
            "-o",
            "plain",
            "--size",
            "128",
            "--cores",
            "4",
            "--core-mass",
            "5Msun,8Msun",
            "--seed",
            "8",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(
        &[
            "segment",
            "plain/synth.fits",
            "-o",
            "plainrun",
            "--distance",
            "250pc",
            "--no-figure",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(
        &[
            "compare",
            "plainrun",
            "--truth",
            "plain/synth-truth.csv",
            "-o",
            "plainscore",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains("of 4 injected cores recovered"),
        "{}",
        o.stdout
    );
    // The right truth is accepted.
    let o = cairn(
        &[
            "compare",
            "run",
            "--truth",
            "a/synth-truth.csv",
            "-o",
            "out",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(dir.join("out/matches.csv").is_file());
}

/// The base map of `dir` with the pixels of columns where `keep` is false missing, written as
/// `name` and read back.
fn masked_base_map(dir: &Path, name: &str, keep: impl Fn(usize) -> bool) -> cairn::map::Map {
    let full = cairn::map::load(
        &dir.join("base/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    let mut data = full.data.clone();
    for ((_, x), v) in data.indexed_iter_mut() {
        if !keep(x) {
            *v = f32::NAN;
        }
    }
    let path = dir.join(name);
    cairn::fits_write::write_image_f32(&path, data.view(), &full.header, false).unwrap();
    cairn::map::load(&path, &cairn::map::LoadOptions::default()).unwrap()
}

/// The mass [Msun] an injection added to the valid pixels of a column-density map at 250 pc:
/// M = mu_H2 m_H Omega d^2 sum dN(H2), with the constants of astropy 8.0.2 as cairn's physics
/// module holds them (checked in tests/physics_reference.rs).
fn added_mass(m: &cairn::map::Map, injected: &ndarray::Array2<f32>) -> f64 {
    added_mass_mu(m, injected, 2.8)
}

/// [`added_mass`] with the mean molecular weight `mu`.
fn added_mass_mu(m: &cairn::map::Map, injected: &ndarray::Array2<f32>, mu: f64) -> f64 {
    let omega = m.wcs.as_ref().unwrap().pixel_solid_angle(128.0, 128.0);
    let d = 250.0 * cairn::physics::constants::PC;
    let added: f64 = injected
        .iter()
        .zip(m.data.iter())
        .filter(|(a, _)| a.is_finite())
        .map(|(&a, &b)| a as f64 - b as f64)
        .sum();
    mu * cairn::physics::constants::M_H * omega * d * d * added * 1e4
        / cairn::physics::constants::M_SUN
}

#[test]
fn cores_are_placed_on_valid_pixels_at_the_minimum_separation() {
    // A map of an invented cloud whose left half is missing.
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let m = masked_base_map(dir, "half.fits", |x| x >= 128);
    let ctx = cairn::score::Context {
        distance_m: Some(250.0 * cairn::physics::constants::PC),
        ..cairn::score::Context::default()
    };
    let opts = cairn::inject::InjectOptions {
        population: cairn::synth::CorePopulation {
            count: 12,
            mass_min_msun: 1.0,
            mass_max_msun: 2.0,
            mass_index: 2.35,
            radius_min_pc: 0.01,
            radius_max_pc: 0.02,
            profile: cairn::synth::Profile::Gaussian,
            margin_px: 0.0,
        },
        distance_pc: 250.0,
        seed: 11,
        min_separation_arcsec: Some(120.0),
    };
    let inj = cairn::inject::inject(&mut m.clone(), &ctx, &opts).unwrap();
    assert_eq!(inj.truth.len(), 12);
    // 6" pixels: 120" is 20 pixels.
    for (i, a) in inj.truth.iter().enumerate() {
        assert!(a.x >= 128.0 && a.x <= 255.0 - inj.margin_px, "x {}", a.x);
        assert!(
            a.y >= inj.margin_px && a.y <= 255.0 - inj.margin_px,
            "y {}",
            a.y
        );
        assert!(m.data[(a.y.round() as usize, a.x.round() as usize)].is_finite());
        for b in &inj.truth[..i] {
            let sep = (a.x - b.x).hypot(a.y - b.y);
            assert!(
                sep >= 20.0 - 1e-9,
                "cores {} and {} {sep} px apart",
                a.id,
                b.id
            );
        }
    }
    // Missing pixels stay missing.
    assert!(
        inj.data
            .iter()
            .zip(m.data.iter())
            .all(|(a, b)| a.is_nan() == b.is_nan())
    );
    // The mass added to the valid pixels is the mass the truth records (cores keep their
    // reach, four standard deviations of core and beam, on valid pixels: all but 3e-4 of a
    // Gaussian's mass; the rest is f32 rounding).
    let mass = added_mass(&m, &inj.data);
    let truth: f64 = inj.truth.iter().map(|c| c.mass_msun).sum();
    assert!(
        (mass - truth).abs() <= 1e-3 * truth,
        "{mass} Msun added on valid pixels, {truth} Msun recorded"
    );
}

/// Beside missing pixels the injected mass is the recorded mass: on a map valid only in a
/// strip 60 pixels wide (an invented cloud's map with missing borders, as real cut-outs
/// have), cores whose reach would cross into the missing pixels are placed elsewhere (before
/// this rule, cores 3 pixels from the border lost a tenth of the mass).
#[test]
fn cores_beside_missing_pixels_keep_their_mass() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let m = masked_base_map(dir, "strip.fits", |x| (100..160).contains(&x));
    let ctx = cairn::score::Context {
        distance_m: Some(250.0 * cairn::physics::constants::PC),
        ..cairn::score::Context::default()
    };
    for seed in [1, 2, 3] {
        let opts = cairn::inject::InjectOptions {
            population: cairn::synth::CorePopulation {
                count: 5,
                mass_min_msun: 1.0,
                mass_max_msun: 2.0,
                mass_index: 2.35,
                radius_min_pc: 0.02,
                radius_max_pc: 0.03,
                profile: cairn::synth::Profile::Gaussian,
                margin_px: 0.0,
            },
            distance_pc: 250.0,
            seed,
            min_separation_arcsec: None,
        };
        // The injection moves the map's pixels into its result: a copy keeps `m` whole.
        let mut work = m.clone();
        let inj = cairn::inject::inject(&mut work, &ctx, &opts).unwrap();
        assert_eq!(work.data.dim(), (0, 0));
        // All but 3e-4 of each Gaussian's mass lies within its reach; the rest is f32
        // rounding.
        let mass = added_mass(&m, &inj.data);
        let truth: f64 = inj.truth.iter().map(|c| c.mass_msun).sum();
        assert!(
            (mass - truth).abs() <= 1e-3 * truth,
            "seed {seed}: {mass} Msun added on valid pixels, {truth} Msun recorded"
        );
    }
}

/// `synth --into --mu-h2`: the cores hold M / (mu_H2 m_H) molecules with the given mu_H2, so
/// the mass added to a column-density map is the recorded mass by M = mu_H2 m_H Omega d^2
/// sum dN(H2) (Hildebrand 1983; common practice) with that mu_H2 and not with 2.8; the
/// injection record names it, and a run with the same mu_H2 is scored without a warning about
/// it while one left at 2.8 is warned about, with the factor 2.8/2.33.
#[test]
fn injection_takes_the_mean_molecular_weight_given() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let o = inject(dir, "base/synth.fits", "inj", &["--mu-h2", "2.33"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let spec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("inj/synth-spec.json")).unwrap())
            .unwrap();
    assert_eq!(spec["mu_h2"].as_f64(), Some(2.33));
    let m = cairn::map::load(
        &dir.join("base/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    let inj = cairn::map::load(
        &dir.join("inj/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    let truth_text = std::fs::read_to_string(dir.join("inj/synth-truth.csv")).unwrap();
    let mut lines = truth_text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = header.iter().position(|h| *h == "mass_msun").unwrap();
    let truth: f64 = lines
        .map(|l| l.split(',').nth(col).unwrap().parse::<f64>().unwrap())
        .sum();
    let mass = added_mass_mu(&m, &inj.data, 2.33);
    assert!(
        (mass - truth).abs() <= 1e-3 * truth,
        "{mass} Msun added with mu_H2 2.33, {truth} Msun recorded"
    );
    let o = segment_and_score(
        dir,
        "inj/synth.fits",
        "same",
        &["--distance", "250pc", "--mu-h2", "2.33"],
        "inj/synth-truth.csv",
        "score-same",
    );
    assert!(!o.stderr.contains("mu_H2"), "{}", o.stderr);
    let o = segment_and_score(
        dir,
        "inj/synth.fits",
        "default",
        &["--distance", "250pc"],
        "inj/synth-truth.csv",
        "score-default",
    );
    assert!(
        o.stderr.contains(
            "the run's mu_H2 is 2.8 and the injection's 2.33: the run's masses are 1.2017"
        ),
        "{}",
        o.stderr
    );
    // Plain synth records a mu_H2 other than the default in its specification, which
    // reproduces the map byte for byte.
    let o = cairn(
        &[
            "synth", "-o", "plain", "--size", "64", "--mu-h2", "2.33", "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let text = std::fs::read_to_string(dir.join("plain/synth-spec.json")).unwrap();
    let spec: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(spec["mu_h2"].as_f64(), Some(2.33));
    let o = cairn(
        &[
            "synth",
            "-o",
            "again",
            "--spec",
            "plain/synth-spec.json",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        std::fs::read(dir.join("plain/synth.fits")).unwrap()
            == std::fs::read(dir.join("again/synth.fits")).unwrap()
    );
}

/// The demo maps' truth tables name their maps by SHA-256 (as `cairn synth` writes them), so a
/// run of a demo map is scored against its own truth: every core has its row in matches.csv,
/// and the truth of the other demo map (another file) is refused.
#[test]
fn a_demo_maps_truth_scores_a_run_of_it() {
    let d = tempfile::tempdir().unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-maps");
    let map = demo.join("velloran-column.fits");
    let o = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "run",
            "--distance",
            "410pc",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let truth = demo.join("velloran-column-truth.csv");
    let o = cairn(
        &[
            "compare",
            "run",
            "--truth",
            truth.to_str().unwrap(),
            "-o",
            "scored",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    // The run used the assumptions the demo map was made with: no warning.
    assert!(!o.stderr.contains("warning"), "{}", o.stderr);
    let (_, cores) = csv(&truth);
    let (mh, matches) = csv(&d.path().join("scored/matches.csv"));
    assert_eq!(matches.len(), cores.len());
    // This run misses a core among recovered ones of both lighter and heavier mass, so the
    // unbinned logistic fit exists; its numbers are the same in every output.
    let leaf = column(&mh, "leaf");
    let missed = matches.iter().filter(|m| m[leaf].is_empty()).count();
    assert!(missed > 0 && missed < matches.len(), "{missed} missed");
    let report = std::fs::read_to_string(d.path().join("scored/report.md")).unwrap();
    assert!(
        report.contains("**Unbinned 90% completeness (logistic fit)**: **"),
        "{report}"
    );
    logistic_fit_is_reported(d.path(), "scored", &o.stdout, &report);
    // The emission demo segmented at another dust temperature than it was made with (its
    // record holds the emission's assumptions under output.dust_emission): named.
    let o = cairn(
        &[
            "segment",
            demo.join("velloran-850um.fits").to_str().unwrap(),
            "-o",
            "run850",
            "--distance",
            "410pc",
            "--temperature",
            "16K",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(
        &[
            "compare",
            "run850",
            "--truth",
            demo.join("velloran-850um-truth.csv").to_str().unwrap(),
            "-o",
            "scored850",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert_eq!(
        o.stderr.matches("warning").count(),
        1,
        "only the temperature differs: {}",
        o.stderr
    );
    // The factor on the masses is B(nu, 14 K) / B(nu, 16 K) at 850 um (Planck's law with the
    // 2019 SI values of h, k and c; the optically thin conversion of Hildebrand 1983).
    let (h, k, c) = (6.626_070_15e-34, 1.380_649e-23, 299_792_458.0);
    let x = |t: f64| h * (c / 850e-6) / (k * t);
    let planck_ratio = (x(16.0).exp() - 1.0) / (x(14.0).exp() - 1.0);
    let factor = |stderr: &str, what: &str| -> f64 {
        let want = format!(
            "warning: the run converts the map to masses otherwise than the injection ({what}): the run's masses are "
        );
        let at = stderr
            .find(&want)
            .unwrap_or_else(|| panic!("{want} in {stderr}"));
        stderr[at + want.len()..]
            .split_whitespace()
            .next()
            .unwrap()
            .parse()
            .unwrap()
    };
    let f = factor(&o.stderr, "dust temperature 16 K against 14 K");
    assert!(
        (f - planck_ratio).abs() < 1e-8 * planck_ratio,
        "{f} against {planck_ratio}"
    );

    // Other runs of the emission demo: (a) an opacity law written otherwise but equal at every
    // frequency (0.025 cm2/g at 500 GHz with beta 2 is 0.1 cm2/g at 1 THz): no warning; (b)
    // another beam on a map per beam: the masses scale as the beam's solid angle, by
    // (18.2/25)^2; (c) another unit: named.
    let map850 = demo.join("velloran-850um.fits");
    let truth850 = demo.join("velloran-850um-truth.csv");
    let score = |name: &str, extra: &[&str]| -> String {
        let mut args = vec!["--distance", "410pc"];
        args.extend_from_slice(extra);
        segment_and_score(
            d.path(),
            map850.to_str().unwrap(),
            name,
            &args,
            truth850.to_str().unwrap(),
            &format!("{name}-scored"),
        )
        .stderr
    };
    let same_law = score(
        "law",
        &[
            "--temperature",
            "14K",
            "--opacity",
            "0.025cm2/g",
            "--opacity-frequency",
            "500GHz",
        ],
    );
    assert!(!same_law.contains("warning"), "{same_law}");
    let beam = score("beam", &["--temperature", "14K", "--beam", "25arcsec"]);
    let f = factor(&beam, "beam 25\" x 25\" against 18.2\" x 18.2\"");
    let want = (18.2f64 / 25.0).powi(2);
    assert!((f - want).abs() < 1e-6 * want, "{f} against {want}");
    let unit = score("unit", &["--temperature", "14K", "--unit", "MJy/sr"]);
    assert!(
        unit.contains(
            "warning: the run read the map as surface brightness and the injection as flux density per beam"
        ),
        "{unit}"
    );
    let other = demo.join("velloran-850um-truth.csv");
    let args = [
        "compare",
        "run",
        "--truth",
        other.to_str().unwrap(),
        "-o",
        "scored2",
    ];
    let o = cairn(&args, d.path());
    check_refused(&o, &args, "velloran-850um-truth.csv", "another map");
}

/// Cores far too faint to see, injected into a map crowded with its own cores: a leaf of the
/// map's own that peaks within a beam of one is matched to it, and the report names such
/// matches (a leaf's `mass_excess` more than ten times the injected mass) instead of letting
/// them pass as recoveries unremarked.
#[test]
fn leaves_of_the_maps_own_matched_to_faint_cores_are_named() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let run = |args: &[&str]| {
        let o = cairn(args, dir);
        assert_eq!(o.code, 0, "{args:?}: {}", o.stderr);
    };
    run(&[
        "synth", "-o", "real", "--size", "256", "--cores", "600", "--noise", "1e20cm-2", "--seed",
        "5", "-q",
    ]);
    run(&[
        "synth",
        "--into",
        "real/synth.fits",
        "-o",
        "inj",
        "--distance",
        "250pc",
        "--cores",
        "80",
        "--core-mass",
        "1e-4Msun,2e-4Msun",
        "--min-separation",
        "40arcsec",
        "--seed",
        "2",
        "-q",
    ]);
    run(&[
        "segment",
        "inj/synth.fits",
        "-o",
        "run",
        "--distance",
        "250pc",
        "--no-figure",
        "-q",
    ]);
    run(&[
        "compare",
        "run",
        "--truth",
        "inj/synth-truth.csv",
        "-o",
        "scored",
        "-q",
    ]);
    let (head, rows) = csv(&dir.join("scored/matches.csv"));
    let col = |n: &str| head.iter().position(|h| h == n).unwrap();
    let ratio = col("mass_excess_ratio");
    let big = rows
        .iter()
        .filter(|r| r[ratio].parse::<f64>().unwrap_or(0.0) > 10.0)
        .count();
    assert!(big > 0, "the crowded map gives such a match");
    let report = std::fs::read_to_string(dir.join("scored/report.md")).unwrap();
    assert!(
        report.contains(&format!("**{big} of the matches**")),
        "{report}"
    );
    assert!(report.contains("Give --baseline"), "{report}");

    // With a baseline run of the map before injection, at the scored run's thresholds (given
    // in map units; without a distance, so it has no masses): the cores on its leaves are left
    // out, the big matches among them.
    let record: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("run/run.json")).unwrap()).unwrap();
    let value = |k: &str| {
        record["parameters"][k]["value"]
            .as_f64()
            .unwrap()
            .to_string()
    };
    let (floor, prominence, area) = (value("floor"), value("prominence"), value("min_area"));
    let same_thresholds = [
        "--floor",
        &floor,
        "--prominence",
        &prominence,
        "--min-area",
        &area,
        "--no-figure",
        "-q",
    ];
    run(&[
        &["segment", "real/synth.fits", "-o", "before"][..],
        &same_thresholds,
    ]
    .concat());
    let args = [
        "compare",
        "run",
        "--truth",
        "inj/synth-truth.csv",
        "--baseline",
        "before",
        "-o",
        "scored-b",
        "-q",
    ];
    let o = cairn(&args, dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!o.stderr.contains("warning"), "{}", o.stderr);
    let (head, rows) = csv(&dir.join("scored-b/matches.csv"));
    let col = |n: &str| head.iter().position(|h| h == n).unwrap();
    let (ratio, own) = (col("mass_excess_ratio"), col("own_leaf"));
    let on_own = rows.iter().filter(|r| !r[own].is_empty()).count();
    assert!(on_own > 0, "some cores fall on the map's own leaves");
    // Cores left out take no part in the matching: no leaf is theirs.
    let leaf = col("leaf");
    assert!(
        rows.iter().all(|r| r[own].is_empty() || r[leaf].is_empty()),
        "a core left out holds a leaf"
    );
    for r in &rows {
        if r[ratio].parse::<f64>().unwrap_or(0.0) > 10.0 {
            assert!(!r[own].is_empty(), "a big match on no own leaf: {r:?}");
        }
    }
    let (ch, bins) = csv(&dir.join("scored-b/completeness.csv"));
    let injected: usize = bins
        .iter()
        .map(|b| {
            b[ch.iter().position(|h| h == "injected").unwrap()]
                .parse::<usize>()
                .unwrap()
        })
        .sum();
    assert_eq!(injected, rows.len() - on_own);
    let report = std::fs::read_to_string(dir.join("scored-b/report.md")).unwrap();
    assert!(
        report.contains(&format!(
            "{on_own} of the {} cores lie within one beam FWHM of one of its leaves",
            rows.len()
        )),
        "{report}"
    );
    assert!(!report.contains("of the matches**"), "{report}");
    assert!(
        o.stdout.contains(&format!(
            "away from the map's own leaves ({on_own} more, placed on them, not counted)"
        )),
        "{}",
        o.stdout
    );

    // A scored run whose match radius (its beam) reaches a leaf of the baseline from every
    // core leaves nothing to score: refused.
    run(&[
        &[
            "segment",
            "inj/synth.fits",
            "-o",
            "wide",
            "--distance",
            "250pc",
            "--beam",
            "600arcsec",
        ][..],
        &same_thresholds,
    ]
    .concat());
    let args = [
        "compare",
        "wide",
        "--truth",
        "inj/synth-truth.csv",
        "--baseline",
        "before",
        "-o",
        "scored-w",
    ];
    let o = cairn(&args, dir);
    check_refused(&o, &args, "before", "none is left to score");
    assert!(!dir.join("scored-w").exists());

    // A baseline at other thresholds is named; one of another map is refused.
    run(&[
        "segment",
        "real/synth.fits",
        "-o",
        "loose",
        "--floor",
        "1e21",
        "--no-figure",
        "-q",
    ]);
    let o = cairn(
        &[
            "compare",
            "run",
            "--truth",
            "inj/synth-truth.csv",
            "--baseline",
            "loose",
            "-o",
            "scored-l",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr
            .contains("warning: the baseline run's floor (1e21) is not the scored run's"),
        "{}",
        o.stderr
    );
    let args = [
        "compare",
        "run",
        "--truth",
        "inj/synth-truth.csv",
        "--baseline",
        "run",
        "-o",
        "scored-x",
    ];
    let o = cairn(&args, dir);
    check_refused(
        &o,
        &args,
        "structures.csv",
        "than the one the cores were injected into",
    );
    assert!(!dir.join("scored-x").exists());
}

/// A run made with other assumptions than the injection's is scored with a warning naming each
/// difference and its factor on the masses (distance squared; mu_H2 for a column-density map),
/// on stderr (with --quiet too) and in the report; a truth table without its injection record
/// beside it is scored with a sentence saying the check could not be made. The factors are
/// those of the mass formula M = N(H2) mu_H2 m_H d^2 Omega (Hildebrand 1983; common practice).
#[test]
fn a_run_with_other_assumptions_than_the_injection_is_named() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let o = inject(dir, "base/synth.fits", "inj", &["--seed", "5"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let spec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("inj/synth-spec.json")).unwrap())
            .unwrap();
    assert_eq!(spec["mu_h2"].as_f64(), Some(2.8), "the record names mu_H2");
    let o = segment_and_score(
        dir,
        "inj/synth.fits",
        "run",
        &["--distance", "300pc", "--mu-h2", "2.94"],
        "inj/synth-truth.csv",
        "score",
    );
    // (300/250)^2 = 1.44 and 2.94/2.8 = 1.05.
    for want in [
        "the run's distance is 300 pc and the injection's 250 pc: the run's masses are 1.44 times",
        "the run's mu_H2 is 2.94 and the injection's 2.8: the run's masses are 1.05 times",
    ] {
        assert!(
            o.stderr.contains(&format!("warning: {want}")),
            "{}",
            o.stderr
        );
        let report = std::fs::read_to_string(dir.join("score/report.md")).unwrap();
        assert!(report.contains("assumptions differ"), "{report}");
        assert!(report.contains(want), "{report}");
    }
    // Without the record beside the truth table.
    std::fs::create_dir(dir.join("alone")).unwrap();
    std::fs::copy(
        dir.join("inj/synth-truth.csv"),
        dir.join("alone/synth-truth.csv"),
    )
    .unwrap();
    // Scores the run against the truth table alone in its folder.
    let score_alone = |out: &str| {
        cairn(
            &[
                "compare",
                "run",
                "--truth",
                "alone/synth-truth.csv",
                "-o",
                out,
                "-q",
            ],
            dir,
        )
    };
    let o = score_alone("score2");
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr
            .contains("could not be checked against the injection's")
            && o.stderr.contains("synth-spec.json cannot be read"),
        "{}",
        o.stderr
    );
    let report = std::fs::read_to_string(dir.join("score2/report.md")).unwrap();
    assert!(
        report.contains(
            "**The run's physical assumptions could not be checked against the injection's.**"
        ) && !report.contains("assumptions differ"),
        "{report}"
    );
    // The record of another injection beside the table is not taken for its own: another
    // seed's injection into the same map, at another distance.
    let o = cairn(
        &[
            "synth",
            "--into",
            "base/synth.fits",
            "-o",
            "other",
            "--distance",
            "300pc",
            "--cores",
            "10",
            "--seed",
            "6",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    std::fs::copy(
        dir.join("other/synth-spec.json"),
        dir.join("alone/synth-spec.json"),
    )
    .unwrap();
    let o = score_alone("score3");
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr
            .contains("synth-spec.json is the record of another injection")
            && !o.stderr.contains("the injection's 300 pc"),
        "{}",
        o.stderr
    );
}

/// A run on the injected map smoothed to a common resolution converts its Jy/beam values
/// (rescaled to the new beam) to the same masses as the injection, which used the file's own
/// beam: no mass-scale warning for the beam.
#[test]
fn a_run_at_a_common_resolution_is_on_the_injections_mass_scale() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let o = cairn(
        &[
            "synth",
            "--into",
            demo.to_str().unwrap(),
            "-o",
            "inj",
            "--distance",
            "410pc",
            "--temperature",
            "14K",
            "--cores",
            "20",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let distance = "410pc";
    let o = segment_and_score(
        dir,
        "inj/synth.fits",
        "smooth",
        &[
            "--distance",
            distance,
            "--temperature",
            "14K",
            "--common-resolution",
            "0.1pc",
        ],
        "inj/synth-truth.csv",
        "score",
    );
    assert!(
        !o.stderr.contains("otherwise than the injection"),
        "{}",
        o.stderr
    );
    // The same run given another beam for the file is named, with the factor of the beams'
    // solid angles.
    let o = segment_and_score(
        dir,
        "inj/synth.fits",
        "wide",
        &[
            "--distance",
            distance,
            "--temperature",
            "14K",
            "--beam",
            "36.4arcsec",
            "--common-resolution",
            "0.2pc",
        ],
        "inj/synth-truth.csv",
        "score-wide",
    );
    assert!(
        o.stderr
            .contains("beam 36.4\" x 36.4\" against 18.2\" x 18.2\"")
            && o.stderr
                .contains("masses are 0.25 times the injection's scale"),
        "{}",
        o.stderr
    );
}

/// `synth --into --temperature-map`: on an emission map, a temperature map of 14 K everywhere
/// gives the very pixels of `--temperature 14K` (the same conversion at each pixel); the
/// injection record and the run record name the temperature map by SHA-256, and scoring says
/// when the run used another temperature map or a single temperature instead of it.
#[test]
fn a_temperature_map_injects_as_its_temperature_and_is_checked_by_sha256() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let map = cairn::map::load(&demo, &cairn::map::LoadOptions::default()).unwrap();
    let mut h = map.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("K".into()), "");
    for (name, t) in [("t14.fits", 14.0f32), ("t15.fits", 15.0)] {
        let field = map.data.mapv(|_| t);
        cairn::fits_write::write_image_f32(&dir.join(name), field.view(), &h, true).unwrap();
    }
    // The 14 K map saved again with one more keyword: another file, the same temperatures.
    h.set("OBSERVER", cairn::header::Value::Str("nobody".into()), "");
    let field = map.data.mapv(|_| 14.0f32);
    cairn::fits_write::write_image_f32(&dir.join("t14copy.fits"), field.view(), &h, true).unwrap();
    let demo = demo.to_str().unwrap();
    let with = |out: &str, extra: &[&str]| {
        let mut args = vec![
            "synth",
            "--into",
            demo,
            "-o",
            out,
            "--distance",
            "410pc",
            "--cores",
            "12",
            "-q",
        ];
        args.extend_from_slice(extra);
        let o = cairn(&args, dir);
        assert_eq!(o.code, 0, "{}", o.stderr);
    };
    with("by_map", &["--temperature-map", "t14.fits"]);
    with("by_value", &["--temperature", "14K"]);
    let load = |p: &str| cairn::map::load(&dir.join(p), &cairn::map::LoadOptions::default());
    assert_eq!(
        load("by_map/synth.fits").unwrap().data,
        load("by_value/synth.fits").unwrap().data
    );
    let spec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("by_map/synth-spec.json")).unwrap())
            .unwrap();
    let sha14 = spec["temperature_map"]["sha256"]
        .as_str()
        .unwrap()
        .to_string();
    assert_eq!(sha14.len(), 64);
    assert!(spec["temperature_k"].is_null());

    let segment_and_score = |name: &str, temperature: &[&str]| -> String {
        let mut args = vec!["--distance", "410pc"];
        args.extend_from_slice(temperature);
        segment_and_score(
            dir,
            "by_map/synth.fits",
            name,
            &args,
            "by_map/synth-truth.csv",
            &format!("{name}-score"),
        )
        .stderr
    };
    let same = segment_and_score("same", &["--temperature-map", "t14.fits"]);
    assert!(!same.contains("warning"), "{same}");
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("same/run.json")).unwrap()).unwrap();
    assert_eq!(
        run["other_inputs"]["temperature_map"]["sha256"].as_str(),
        Some(sha14.as_str())
    );
    let other = segment_and_score("other", &["--temperature-map", "t15.fits"]);
    assert!(
        other.contains("warning: the run's temperature map (file SHA-256 ")
            && other.contains("is not the injection's, ")
            && other.contains("t14.fits (file SHA-256 ")
            && other.contains("nor holds the same values"),
        "{other}"
    );
    // A copy holding the same values is the same assumption: no warning, though its file's
    // SHA-256 differs; the records name both by the values' SHA-256 too.
    let copy = segment_and_score("copy", &["--temperature-map", "t14copy.fits"]);
    assert!(!copy.contains("warning"), "{copy}");
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("copy/run.json")).unwrap()).unwrap();
    let entry = &run["other_inputs"]["temperature_map"];
    assert_ne!(entry["sha256"].as_str(), Some(sha14.as_str()));
    assert_eq!(
        entry["values_sha256"],
        spec["temperature_map"]["values_sha256"]
    );
    assert_eq!(entry["values_sha256"].as_str().map(str::len), Some(64));
    let single = segment_and_score("single", &["--temperature", "14K"]);
    assert!(
        single.contains(
            "warning: the run's dust temperature is 14 K and the injection used the temperature map "
        ) && single.contains("t14.fits: the run's masses differ"),
        "{single}"
    );
}

/// An A_K map injected as such (`--extinction-band K`) and segmented as A_V (the default): the
/// scoring names the different reading, as the masses differ by A_V/A_K.
#[test]
fn a_map_read_in_another_band_than_the_injection_is_named() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let m = cairn::map::load(
        &dir.join("base/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    let mut h = m.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("mag".into()), "");
    let ak = m.data.mapv(|v| v * 1e-22);
    cairn::fits_write::write_image_f32(&dir.join("ak.fits"), ak.view(), &h, true).unwrap();
    let o = inject(dir, "ak.fits", "inj", &["--extinction-band", "K"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    for (name, band, warned) in [("as_k", "K", false), ("as_v", "V", true)] {
        let o = cairn(
            &[
                "segment",
                "inj/synth.fits",
                "-o",
                name,
                "--distance",
                "250pc",
                "--extinction-band",
                band,
                "--no-figure",
                "-q",
            ],
            dir,
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        let out = format!("{name}-scored");
        let o = cairn(
            &[
                "compare",
                name,
                "--truth",
                "inj/synth-truth.csv",
                "-o",
                &out,
                "-q",
            ],
            dir,
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        assert_eq!(
            o.stderr.contains(
                "warning: the run read the map as visual extinction A_V and the injection as K-band extinction A_K"
            ),
            warned,
            "{name}: {}",
            o.stderr
        );
        assert_eq!(o.stderr.contains("warning"), warned, "{name}: {}", o.stderr);
    }
}

/// completeness.csv's bins keyed by their lower edge (as written): (injected, recovered).
fn bin_counts(path: &Path) -> std::collections::BTreeMap<String, (u64, u64)> {
    let (head, rows) = csv(path);
    let (lo, inj, rec) = (
        column(&head, "mass_lo"),
        column(&head, "injected"),
        column(&head, "recovered"),
    );
    rows.iter()
        .map(|r| {
            (
                r[lo].clone(),
                (r[inj].parse().unwrap(), r[rec].parse().unwrap()),
            )
        })
        .collect()
}

/// The per-bin sums of several scorings' counts (bins of one width share their edges, so
/// they are keyed alike).
fn summed(
    tables: &[std::collections::BTreeMap<String, (u64, u64)>],
) -> std::collections::BTreeMap<String, (u64, u64)> {
    let mut out = std::collections::BTreeMap::new();
    for t in tables {
        for (k, (n, r)) in t {
            let e = out.entry(k.clone()).or_insert((0, 0));
            e.0 += n;
            e.1 += r;
        }
    }
    out
}

/// Pooling two injections into one map (`compare RUN1 RUN2 --truth T1 --truth T2`) is the
/// hand sum of the two single scorings: each core is matched within its own pair, so the
/// pooled matches.csv holds both single tables' rows with a leading `set` column, and every
/// bin's injected and recovered counts are the sums of the two tables' (with or without a
/// baseline serving both pairs). The fraction of a pooled bin is its recovered over injected.
/// A pooled scoring with baselines (`pooled`) counts, bin by bin, the sums of the pairs scored
/// alone with theirs (`singles`), and its matches.csv leads with the set and ends with
/// `own_leaf`.
fn pooled_with_baselines_sums_the_pairs(dir: &Path, pooled: &str, singles: &[&str]) {
    let single: Vec<_> = singles
        .iter()
        .map(|s| bin_counts(&dir.join(s).join("completeness.csv")))
        .collect();
    assert_eq!(
        bin_counts(&dir.join(pooled).join("completeness.csv")),
        summed(&single)
    );
    let (hp, _) = csv(&dir.join(pooled).join("matches.csv"));
    assert_eq!(
        (hp[0].as_str(), hp.last().unwrap().as_str()),
        ("set", "own_leaf")
    );
}

#[test]
fn pooled_injections_add_their_counts_bin_by_bin() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let seg = ["--distance", "250pc", "--temperature", "12K"];
    for (name, seed) in [("a", "5"), ("b", "6")] {
        let o = inject(dir, "base/synth.fits", name, &["--seed", seed]);
        assert_eq!(o.code, 0, "{}", o.stderr);
        segment_and_score(
            dir,
            &format!("{name}/synth.fits"),
            &format!("run{name}"),
            &seg,
            &format!("{name}/synth-truth.csv"),
            &format!("score{name}"),
        );
    }
    let pairs = [
        "compare",
        "runa",
        "runb",
        "--truth",
        "a/synth-truth.csv",
        "--truth",
        "b/synth-truth.csv",
        "-q",
    ];
    let mut pooled = pairs.to_vec();
    pooled.extend_from_slice(&["-o", "pooled"]);
    let o = cairn(&pooled, dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    // Both runs were made with the same options and the injections' assumptions.
    assert!(!o.stderr.contains("warning"), "{}", o.stderr);
    assert!(o.stdout.contains("of 60 injected cores"), "{}", o.stdout);
    let report = std::fs::read_to_string(dir.join("pooled/report.md")).unwrap();
    logistic_fit_is_reported(dir, "pooled", &o.stdout, &report);
    let single = [
        bin_counts(&dir.join("scorea/completeness.csv")),
        bin_counts(&dir.join("scoreb/completeness.csv")),
    ];
    let pooled_bins = bin_counts(&dir.join("pooled/completeness.csv"));
    assert_eq!(pooled_bins, summed(&single));
    assert_eq!(pooled_bins.values().map(|c| c.0).sum::<u64>(), 60);
    let (ch, rows) = csv(&dir.join("pooled/completeness.csv"));
    for r in &rows {
        let (n, k): (f64, f64) = (
            r[column(&ch, "injected")].parse().unwrap(),
            r[column(&ch, "recovered")].parse().unwrap(),
        );
        if n > 0.0 {
            let f: f64 = r[column(&ch, "fraction")].parse().unwrap();
            assert!((f - k / n).abs() < 1e-12, "{f} {k}/{n}");
        }
    }
    // The single tables have no set column; the pooled one leads with it, then holds the
    // rows of a (set 1) and of b (set 2) as the single scorings wrote them.
    let (ha, ra) = csv(&dir.join("scorea/matches.csv"));
    let (hb, rb) = csv(&dir.join("scoreb/matches.csv"));
    let (hp, rp) = csv(&dir.join("pooled/matches.csv"));
    assert_eq!(ha[0], "id");
    assert_eq!(hp[0], "set");
    assert_eq!(hp[1..], ha[..]);
    assert_eq!(hb, ha);
    assert_eq!(rp.len(), ra.len() + rb.len());
    for (k, r) in rp.iter().enumerate() {
        let (set, want) = if k < ra.len() {
            ("1", &ra[k])
        } else {
            ("2", &rb[k - ra.len()])
        };
        assert_eq!(r[0], set);
        assert_eq!(&r[1..], &want[..], "row {k}");
    }
    // The report lists each pair and the pooled numbers.
    let report = std::fs::read_to_string(dir.join("pooled/report.md")).unwrap();
    assert!(report.contains("Pooled over 2 injections"), "{report}");
    for t in ["a/synth-truth.csv", "b/synth-truth.csv"] {
        assert!(report.contains(t), "{report}");
    }
    let recovered: u64 = pooled_bins.values().map(|c| c.1).sum();
    assert!(
        report.contains(&format!("Pooled: {recovered} of 60 cores were recovered")),
        "{report}"
    );

    // One baseline (a run of the map before injection) serves both pairs; counts still add.
    let o = cairn(
        &[
            "segment",
            "base/synth.fits",
            "-o",
            "before",
            "--no-figure",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    for name in ["a", "b"] {
        let o = cairn(
            &[
                "compare",
                &format!("run{name}"),
                "--truth",
                &format!("{name}/synth-truth.csv"),
                "--baseline",
                "before",
                "-o",
                &format!("base{name}"),
                "-q",
            ],
            dir,
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let mut with_baseline = pairs.to_vec();
    with_baseline.extend_from_slice(&["--baseline", "before", "-o", "pooledbase"]);
    let o = cairn(&with_baseline, dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    pooled_with_baselines_sums_the_pairs(dir, "pooledbase", &["basea", "baseb"]);

    // A run of b made with another minimum area is pooled, but said to mix two extractions.
    let o = cairn(
        &[
            "segment",
            "b/synth.fits",
            "-o",
            "runb2",
            "--min-area",
            "20px",
            "--no-figure",
            "-q",
            "--distance",
            "250pc",
            "--temperature",
            "12K",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(
        &[
            "compare",
            "runa",
            "runb2",
            "--truth",
            "a/synth-truth.csv",
            "--truth",
            "b/synth-truth.csv",
            "-o",
            "mixed",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr.contains("warning") && o.stderr.contains("min_area 20px"),
        "{}",
        o.stderr
    );
    let report = std::fs::read_to_string(dir.join("mixed/report.md")).unwrap();
    assert!(report.contains("mixes two extractions"), "{report}");
}

/// Pooling refuses, in one sentence and with nothing written: counts of runs and truth tables
/// that differ, a pair whose run is of the other injection's map (naming both), and one
/// injection given twice.
#[test]
fn pooling_refuses_unpaired_or_mismatched_sets() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    for (name, seed) in [("a", "5"), ("b", "6")] {
        let o = inject(dir, "base/synth.fits", name, &["--seed", seed]);
        assert_eq!(o.code, 0, "{}", o.stderr);
        let o = cairn(
            &[
                "segment",
                &format!("{name}/synth.fits"),
                "-o",
                &format!("run{name}"),
                "--distance",
                "250pc",
                "--no-figure",
                "-q",
            ],
            dir,
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let cases: [(&[&str], &str, &str); 5] = [
        (
            &["runa", "runb", "--truth", "a/synth-truth.csv"],
            "--truth",
            "2 runs and 1 truth table were given",
        ),
        (
            &[
                "runa",
                "--truth",
                "a/synth-truth.csv",
                "--truth",
                "b/synth-truth.csv",
            ],
            "--truth",
            "1 run and 2 truth tables were given",
        ),
        (
            &[
                "runa",
                "runb",
                "--truth",
                "b/synth-truth.csv",
                "--truth",
                "a/synth-truth.csv",
            ],
            "b/synth-truth.csv",
            "the run runa/structures.csv was made on another map",
        ),
        (
            &[
                "runa",
                "runa",
                "--truth",
                "a/synth-truth.csv",
                "--truth",
                "a/synth-truth.csv",
            ],
            "a/synth-truth.csv",
            "is given twice to --truth, so its cores would be counted twice",
        ),
        (
            &[
                "runa",
                "runa",
                "--truth",
                "a/synth-truth.csv",
                "--truth",
                "acopy/synth-truth.csv",
            ],
            "acopy/synth-truth.csv",
            "belongs to the same injected map",
        ),
    ];
    std::fs::create_dir(dir.join("acopy")).unwrap();
    for f in ["synth-truth.csv", "synth-spec.json"] {
        std::fs::copy(dir.join("a").join(f), dir.join("acopy").join(f)).unwrap();
    }
    for (given, names, says) in cases {
        let mut args = vec!["compare"];
        args.extend_from_slice(given);
        args.extend_from_slice(&["-o", "out"]);
        let o = cairn(&args, dir);
        check_refused(&o, &args, names, says);
        assert!(!dir.join("out").exists(), "{args:?}: nothing written");
    }
}

/// Cores whose light would take pixels beyond the largest 32-bit float are refused in one
/// sentence naming the map, nothing is written and the map is left as it was (the injection
/// moves the map's pixels into its result only once every sum is known to fit).
#[test]
fn cores_beyond_the_float_range_are_refused_and_nothing_is_written() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    // A background of 2e38 cm-2, near the largest 32-bit float (3.4e38).
    let o = cairn(
        &[
            "synth",
            "-o",
            "base",
            "--size",
            "256",
            "--background",
            "2e38cm-2",
            "--background-width",
            "0.1",
            "--seed",
            "3",
            "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let before = std::fs::read(dir.join("base/synth.fits")).unwrap();
    // Cores of a few 1e17 solar masses within 0.02-0.04 pc at 250 pc peak near 5e39 cm-2.
    let args = [
        "synth",
        "--into",
        "base/synth.fits",
        "-o",
        "inj",
        "--distance",
        "250pc",
        "--cores",
        "3",
        "--core-mass",
        "3e17Msun,4e17Msun",
        "--core-radius",
        "0.02pc,0.04pc",
        "-q",
    ];
    let o = cairn(&args, dir);
    check_refused(&o, &args, "base/synth.fits", "32-bit floats hold");
    assert!(!dir.join("inj").exists());
    assert_eq!(std::fs::read(dir.join("base/synth.fits")).unwrap(), before);
}

/// A truth table edited by hand is refused in one sentence naming it: a repeated row (its id
/// twice: those cores would count twice in the completeness), and a row taken out (fewer
/// cores than the injection's record says were injected).
#[test]
fn a_truth_table_with_repeated_or_missing_rows_is_refused() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let o = inject(dir, "base/synth.fits", "inj", &["--seed", "5"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(
        &[
            "segment",
            "inj/synth.fits",
            "-o",
            "run",
            "--no-figure",
            "-q",
            "--distance",
            "250pc",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let text = std::fs::read_to_string(dir.join("inj/synth-truth.csv")).unwrap();
    let rows: Vec<&str> = text
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("id,"))
        .collect();
    assert!(rows.len() > 2);
    // The first data row again at the end.
    std::fs::write(
        dir.join("inj/synth-truth.csv"),
        format!("{text}{}\n", rows[0]),
    )
    .unwrap();
    let args = [
        "compare",
        "run",
        "--truth",
        "inj/synth-truth.csv",
        "-o",
        "s",
        "-q",
    ];
    let o = cairn(&args, dir);
    check_refused(&o, &args, "inj/synth-truth.csv", "repeats the id 1 of line");
    // The last data row taken out.
    let cut = text.trim_end().rsplit_once('\n').unwrap().0.to_string() + "\n";
    std::fs::write(dir.join("inj/synth-truth.csv"), cut).unwrap();
    let o = cairn(&args, dir);
    check_refused(
        &o,
        &args,
        "inj/synth-truth.csv",
        &format!("holds {} cores, but its record", rows.len() - 1),
    );
    assert!(!dir.join("s").exists());
}

/// A plain synth truth table whose specification places cores by hand beside its random
/// population holds both; it is scored, not refused as a table with rows added.
#[test]
fn a_truth_table_with_cores_placed_by_hand_is_scored() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let o = cairn(
        &[
            "synth", "-o", "a", "--size", "256", "--cores", "10", "--seed", "2", "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let mut spec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("a/synth-spec.json")).unwrap())
            .unwrap();
    spec["cores"] = serde_json::json!([
        {"x": 128.0, "y": 128.0, "mass_msun": 5.0, "radius_pc": 0.03, "profile": "gaussian"}
    ]);
    std::fs::write(dir.join("spec.json"), spec.to_string()).unwrap();
    let o = cairn(&["synth", "--spec", "spec.json", "-o", "b", "-q"], dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = segment_and_score(
        dir,
        "b/synth.fits",
        "rb",
        &["--distance", "250pc"],
        "b/synth-truth.csv",
        "s",
    );
    assert!(
        o.stdout.contains("of 11 injected cores recovered"),
        "{}",
        o.stdout
    );
}

/// Injections into two different maps pool with one baseline each, in the runs' order: the
/// pooled counts are the sums of each pair scored with its own baseline; one baseline for
/// both is refused (it is not a run of the second injection's map), and so is a count of
/// baselines that is neither one nor one per run.
#[test]
fn injections_into_different_maps_pool_with_a_baseline_each() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let o = cairn(
        &[
            "synth", "-o", "base2", "--size", "256", "--noise", "1e20cm-2", "--seed", "4", "-q",
        ],
        dir,
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let seg = ["--distance", "250pc", "--temperature", "12K"];
    for (name, map, seed) in [("a", "base", "5"), ("c", "base2", "6")] {
        let o = inject(dir, &format!("{map}/synth.fits"), name, &["--seed", seed]);
        assert_eq!(o.code, 0, "{}", o.stderr);
        let mut before = vec![
            "segment".to_string(),
            format!("{map}/synth.fits"),
            "-o".into(),
            format!("before-{map}"),
            "--no-figure".into(),
            "-q".into(),
        ];
        before.extend(seg.iter().map(|s| s.to_string()));
        let before: Vec<&str> = before.iter().map(String::as_str).collect();
        let o = cairn(&before, dir);
        assert_eq!(o.code, 0, "{}", o.stderr);
        segment_and_score(
            dir,
            &format!("{name}/synth.fits"),
            &format!("run{name}"),
            &seg,
            &format!("{name}/synth-truth.csv"),
            &format!("score{name}"),
        );
        let o = cairn(
            &[
                "compare",
                &format!("run{name}"),
                "--truth",
                &format!("{name}/synth-truth.csv"),
                "--baseline",
                &format!("before-{map}"),
                "-o",
                &format!("base{name}"),
                "-q",
            ],
            dir,
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let pairs = [
        "compare",
        "runa",
        "runc",
        "--truth",
        "a/synth-truth.csv",
        "--truth",
        "c/synth-truth.csv",
        "-q",
    ];
    let mut each = pairs.to_vec();
    each.extend_from_slice(&[
        "--baseline",
        "before-base",
        "--baseline",
        "before-base2",
        "-o",
        "pooled",
    ]);
    let o = cairn(&each, dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    pooled_with_baselines_sums_the_pairs(dir, "pooled", &["basea", "basec"]);
    // One baseline for injections into two maps: refused, nothing written.
    let mut one = pairs.to_vec();
    one.extend_from_slice(&["--baseline", "before-base", "-o", "one"]);
    let o = cairn(&one, dir);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(!dir.join("one").exists());
    assert_eq!(o.stderr.trim_end().lines().count(), 1, "{}", o.stderr);
    assert!(
        o.stderr.contains("is a run of another map")
            && o.stderr
                .contains("or one --baseline per run, in the runs' order"),
        "{}",
        o.stderr
    );
    // Three baselines for two runs: refused with the rule.
    let mut three = pairs.to_vec();
    three.extend_from_slice(&[
        "--baseline",
        "before-base",
        "--baseline",
        "before-base2",
        "--baseline",
        "before-base",
        "-o",
        "three",
    ]);
    let o = cairn(&three, dir);
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(!dir.join("three").exists());
    assert!(
        o.stderr
            .contains("3 --baseline runs were given for 2 runs; give one baseline for every pair"),
        "{}",
        o.stderr
    );
}

/// `synth --into --missing-value 0` on a map whose left quarter is zero-filled reads those
/// pixels as missing: no core is placed over them (every injected pixel that changed lies
/// right of the border) and they are written as NaN in the injected map, whose other pixels
/// are the input's or the input's plus cores.
#[test]
fn injection_into_a_zero_filled_border_keeps_off_it() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    let full = cairn::map::load(
        &dir.join("base/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    let mut data = full.data.clone();
    for ((_, x), v) in data.indexed_iter_mut() {
        if x < 64 {
            *v = 0.0;
        }
    }
    cairn::fits_write::write_image_f32(&dir.join("zeros.fits"), data.view(), &full.header, false)
        .unwrap();
    let o = inject(dir, "zeros.fits", "inj", &["--missing-value", "0"]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!o.stderr.contains("are exactly 0"), "{}", o.stderr);
    let inj = cairn::map::load(
        &dir.join("inj/synth.fits"),
        &cairn::map::LoadOptions::default(),
    )
    .unwrap();
    let mut changed = 0;
    for (((_, x), &a), &b) in inj.data.indexed_iter().zip(data.iter()) {
        if x < 64 {
            assert!(a.is_nan(), "column {x}: {a}");
        } else if a != b {
            assert!(a > b, "cores add to the map");
            changed += 1;
        }
    }
    assert!(changed > 1000, "{changed} pixels changed");
    // Without the option the zeros are data, which is said.
    let o = inject(dir, "zeros.fits", "inj0", &[]);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(o.stderr.contains("are exactly 0"), "{}", o.stderr);
}

/// A map whose every pixel is missing is refused as having no valid pixel, not as lacking room
/// for the cores, and nothing is written.
#[test]
fn a_map_without_valid_pixels_is_said_to_have_none() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    base_map(dir);
    masked_base_map(dir, "empty.fits", |_| false);
    let mut args = vec!["synth", "--into", "empty.fits", "-o", "out"];
    args.extend_from_slice(&INJECT);
    let o = cairn(&args, dir);
    check_refused(&o, &args, "empty.fits", "has no valid pixel");
    assert!(!o.stderr.contains("room for"), "{}", o.stderr);
    assert!(!dir.join("out").exists());
}

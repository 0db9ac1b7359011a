//! `cairn compare` end to end: two runs of the same map at different assumed distances give a
//! report, tables, and a warning that names the difference in linear resolution.

use std::process::Command;

fn run(dir: &std::path::Path, args: &[&str]) -> (i32, String, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

#[test]
fn compare_reports_statistics_and_fairness() {
    let d = tempfile::tempdir().unwrap();
    let map =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let m = map.to_str().unwrap();
    for (name, dist) in [("near", "300pc"), ("far", "600pc")] {
        let (code, _, err) = run(
            d.path(),
            &[
                "segment",
                m,
                "-o",
                name,
                "--distance",
                dist,
                "--temperature",
                "12K",
                "--no-figure",
                "-q",
            ],
        );
        assert_eq!(code, 0, "{err}");
    }
    let (code, out, err) = run(
        d.path(),
        &["compare", "near", "far", "-o", "cmp", "--resamples", "50"],
    );
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("near:") && out.contains("far:"), "{out}");
    // Warnings go to stderr, as segment's do; the summary to stdout.
    assert!(
        err.contains("warning: ")
            && err.contains("linear resolution (beam x distance) differs by a factor 2.00"),
        "{err}"
    );
    // Two runs of one map (here at two distances): what the options change, not two clouds,
    // and no p-values between samples that share their pixels; said so.
    assert!(
        err.contains("near and far are runs of the same map (input SHA-256 ")
            && err.contains("show what the options of the two runs change")
            && err.contains("p-values do not apply"),
        "{err}"
    );
    // The warnings give the values of the run records with their units, to four significant
    // digits: the resolution is the beam times the distance (small angles, 1 arcsec =
    // pi / 648000 rad), the sensitivity scales as the distance squared.
    let record = |name: &str, key: &str| -> f64 {
        let text = std::fs::read_to_string(d.path().join(name).join("run.json")).unwrap();
        let v: serde_json::Value = serde_json::from_str(&text).unwrap();
        v["physics"][key].as_f64().unwrap()
    };
    for (what, key, unit, ratio) in [
        ("linear resolution", "linear_resolution_pc", "pc", 2.0),
        ("mass sensitivity", "mass_sensitivity_msun", "Msun", 4.0),
    ] {
        let line = err.lines().find(|l| l.contains(what)).expect(what);
        let said = |name: &str| -> f64 {
            let after = line.split(&format!("{name} has ")).nth(1).expect(line);
            let mut words = after.split([' ', ',', ';']);
            let number = words.next().unwrap();
            assert_eq!(words.next(), Some(unit), "{line}");
            let digits: String = number.chars().filter(|c| c.is_ascii_digit()).collect();
            assert_eq!(digits.trim_start_matches('0').len(), 4, "{line}");
            number.parse().unwrap()
        };
        for name in ["near", "far"] {
            let (s, r) = (said(name), record(name, key));
            assert!((s - r).abs() <= 5e-4 * r, "{line}: {name} {r}");
        }
        assert!((said("far") / said("near") - ratio).abs() < 2e-3, "{line}");
    }
    let beam = record("near", "beam_fwhm_arcsec");
    let expected = beam * std::f64::consts::PI / 648_000.0 * 300.0;
    assert!(
        (record("near", "linear_resolution_pc") / expected - 1.0).abs() < 1e-9,
        "{expected}"
    );
    let report = std::fs::read_to_string(d.path().join("cmp/report.md")).unwrap();
    for section in [
        "## Mass functions",
        "## Mass-size relation",
        "## Between populations",
        "## Fairness",
    ] {
        assert!(report.contains(section), "{section}");
    }
    // The same leaves at twice the distance: masses four times larger, so the mass-size slope
    // (log M against log R with R twice larger) is unchanged.
    let pops = std::fs::read_to_string(d.path().join("cmp/populations.csv")).unwrap();
    let rows: Vec<Vec<&str>> = pops
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| l.split(',').collect())
        .collect();
    let col = rows[0]
        .iter()
        .position(|c| *c == "mass_size_slope")
        .unwrap();
    let (a, b): (f64, f64) = (rows[1][col].parse().unwrap(), rows[2][col].parse().unwrap());
    assert!((a - b).abs() < 1e-9, "{a} {b}");
    // So is its bootstrap (the same resamples of the same leaves, checked against scipy in
    // populations_reference), whose 68% interval holds the slope.
    for name in [
        "mass_size_slope_err_boot",
        "mass_size_slope_boot_lo",
        "mass_size_slope_boot_hi",
    ] {
        let c = rows[0].iter().position(|c| *c == name).unwrap();
        let (x, y): (f64, f64) = (rows[1][c].parse().unwrap(), rows[2][c].parse().unwrap());
        assert!((x - y).abs() < 1e-9 * x.abs().max(1.0), "{name}: {x} {y}");
    }
    let boot = |name: &str| -> f64 {
        let c = rows[0].iter().position(|c| *c == name).unwrap();
        rows[1][c].parse().unwrap()
    };
    assert!(boot("mass_size_slope_boot_lo") < a && a < boot("mass_size_slope_boot_hi"));
    assert!(boot("mass_size_slope_err_boot") > 0.0);
    let med = rows[0].iter().position(|c| *c == "median_mass").unwrap();
    let (ma, mb): (f64, f64) = (rows[1][med].parse().unwrap(), rows[2][med].parse().unwrap());
    assert!(
        (mb / ma - 4.0).abs() < 1e-9,
        "masses scale as distance squared: {ma} {mb}"
    );
    // The log-normal fit's exact intervals (checked against scipy in populations_reference):
    // they hold the fitted value, the width of ln M and its interval do not change with the
    // scale of the masses, and the peak's interval scales with them.
    let get = |row: &[&str], name: &str| -> f64 {
        let c = rows[0].iter().position(|c| *c == name).unwrap();
        row[c].parse().unwrap()
    };
    for row in &rows[1..3] {
        for (lo, mid, hi) in [
            ("lognormal_peak_lo", "lognormal_peak", "lognormal_peak_hi"),
            (
                "lognormal_sigma_lo",
                "lognormal_sigma",
                "lognormal_sigma_hi",
            ),
        ] {
            assert!(
                get(row, lo) < get(row, mid) && get(row, mid) < get(row, hi),
                "{mid}"
            );
        }
    }
    for name in ["lognormal_sigma_lo", "lognormal_sigma_hi"] {
        let (x, y) = (get(&rows[1], name), get(&rows[2], name));
        assert!((x - y).abs() < 1e-12 * x, "{name}: {x} {y}");
    }
    for name in ["lognormal_peak_lo", "lognormal_peak_hi"] {
        let (x, y) = (get(&rows[1], name), get(&rows[2], name));
        assert!((y / x - 4.0).abs() < 1e-9, "{name}: {x} {y}");
    }
    assert!(report.contains("sigma(ln M) (68% interval)"), "{report}");
    // The tail against a truncated log-normal (checked against powerlaw 2.0.0 in
    // populations_reference): one sentence per population, and R, its normalised form and p do
    // not change with the scale of the masses (the tail's lower mass scales with them).
    for label in ["near", "far"] {
        assert!(
            report.contains(&format!("- {label}: the tail's power law is")),
            "{report}"
        );
    }
    for name in [
        "tail_llr_lognormal",
        "tail_llr_lognormal_norm",
        "tail_llr_lognormal_p",
    ] {
        let c = rows[0].iter().position(|c| *c == name).unwrap();
        let (x, y) = (rows[1][c], rows[2][c]);
        if x.is_empty() {
            assert!(y.is_empty(), "{name}: {x} {y}");
            continue;
        }
        let (x, y): (f64, f64) = (x.parse().unwrap(), y.parse().unwrap());
        assert!((x - y).abs() <= 1e-9 * x.abs().max(1.0), "{name}: {x} {y}");
    }
    assert!(get(&rows[1], "tail_llr_lognormal") <= 0.0);
    for f in [
        "mass_functions.csv",
        "cumulative.csv",
        "tests.csv",
        "mass_functions.png",
        "mass_functions.svg",
        "mass_functions.pdf",
        "mass_size.png",
        "mass_size.svg",
        "mass_size.pdf",
    ] {
        assert!(d.path().join("cmp").join(f).is_file());
    }
    // A run without masses is refused with a sentence.
    let (code, _, _) = run(
        d.path(),
        &["segment", m, "-o", "nodist", "--no-figure", "-q"],
    );
    assert_eq!(code, 0);
    let (code, _, err) = run(d.path(), &["compare", "near", "nodist", "-o", "cmp2"]);
    assert_eq!(code, 2);
    assert!(err.contains("--distance"), "{err}");
    assert!(!d.path().join("cmp2").exists());
    // A lower mass limit above every leaf leaves no tail to fit: the summary and the report
    // say why.
    let (code, out, err) = run(
        d.path(),
        &[
            "compare",
            "near",
            "far",
            "-o",
            "cmp7",
            "--mass-min",
            "1000Msun",
            "--resamples",
            "20",
        ],
    );
    assert_eq!(code, 0, "{err}");
    assert!(
        out.contains("no power-law tail") && out.contains("--mass-min"),
        "{out}"
    );
    let report = std::fs::read_to_string(d.path().join("cmp7/report.md")).unwrap();
    assert!(report.contains("near: no power-law tail"), "{report}");
    // A plot width out of range is refused before any work, in one sentence.
    for width in ["10", "30000"] {
        let (code, _, err) = run(
            d.path(),
            &["compare", "near", "far", "-o", "cmp3", "--width", width],
        );
        assert_eq!(code, 2, "{err}");
        assert!(
            err.contains("--width") && err.trim_end().lines().count() == 1,
            "{err}"
        );
        assert!(!d.path().join("cmp3").exists());
    }
    // Runs made with another mean particle weight are flagged.
    let (code, _, err) = run(
        d.path(),
        &[
            "segment",
            m,
            "-o",
            "heavy",
            "--distance",
            "300pc",
            "--temperature",
            "12K",
            "--mu-particle",
            "2.37",
            "--no-figure",
            "-q",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = run(
        d.path(),
        &[
            "compare",
            "near",
            "heavy",
            "-o",
            "cmp4",
            "--resamples",
            "20",
        ],
    );
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("mean particle weight"), "{err}");
    // Said as numbers, not as JSON.
    assert!(
        err.contains("mean particle weight differs (near: 2.33; heavy: 2.37)"),
        "{err}"
    );
    // A catalogue cut short mid-row, or with text in a mass column, is refused as damaged
    // rather than read with a row missing or shifted.
    let csv = std::fs::read_to_string(d.path().join("near/structures.csv")).unwrap();
    std::fs::create_dir(d.path().join("cut")).unwrap();
    std::fs::write(d.path().join("cut/structures.csv"), &csv[..csv.len() - 40]).unwrap();
    let (code, _, err) = run(d.path(), &["compare", "near", "cut", "-o", "cmp5"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("damaged") && err.contains("structures.csv"),
        "{err}"
    );
    let mut lines: Vec<String> = csv.lines().map(str::to_string).collect();
    let header = lines.iter().position(|l| !l.starts_with('#')).unwrap();
    let col = lines[header]
        .split(',')
        .position(|c| c == "mass_excess")
        .unwrap();
    let leaf = lines
        .iter()
        .position(|l| l.split(',').nth(1) == Some("leaf"))
        .unwrap();
    let mut f: Vec<String> = lines[leaf].split(',').map(str::to_string).collect();
    f[col] = "heavy".into();
    lines[leaf] = f.join(",");
    std::fs::create_dir(d.path().join("edited")).unwrap();
    std::fs::write(
        d.path().join("edited/structures.csv"),
        lines.join("\n") + "\n",
    )
    .unwrap();
    let (code, _, err) = run(d.path(), &["compare", "near", "edited", "-o", "cmp6"]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains("'heavy'"), "{err}");
    assert!(!d.path().join("cmp5").exists() && !d.path().join("cmp6").exists());
}

#[path = "common/cli.rs"]
mod cli;

/// A catalogue whose run record belongs to another run (other thresholds on the same map) or
/// is damaged is refused with one sentence naming the file, and nothing is written: the
/// fairness checks would otherwise judge the thresholds of the wrong run.
#[test]
fn compare_refuses_a_run_record_of_another_run() {
    let d = tempfile::tempdir().unwrap();
    let a = cli::demo_run(d.path(), "a", &[]);
    let b = cli::demo_run(d.path(), "b", &["--prominence", "5sigma"]);
    let c = cli::demo_run(d.path(), "c", &[]);
    // The run record of `b` beside the catalogue of `c`.
    std::fs::copy(b.join("run.json"), c.join("run.json")).unwrap();
    let args = ["compare", "a", "c", "-o", "cmp", "--resamples", "20"];
    let o = cli::cairn_limited(&args, d.path(), 2_000_000);
    cli::check_refused(&o, &args, "structures.csv", "come from different runs");
    assert!(o.stderr.contains("prominence"), "{}", o.stderr);
    assert!(!d.path().join("cmp").exists());
    // A run record that is not JSON.
    std::fs::write(c.join("run.json"), "{ not json").unwrap();
    let o = cli::cairn_limited(&args, d.path(), 2_000_000);
    cli::check_refused(&o, &args, "run.json", "not a run record");
    assert!(!d.path().join("cmp").exists());
    // Its own record back: compared.
    std::fs::copy(a.join("run.json"), c.join("run.json")).unwrap();
    let o = cli::cairn_limited(&args, d.path(), 2_000_000);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(d.path().join("cmp/report.md").is_file());
}

mod common;

/// `--tests-above`: the Kolmogorov-Smirnov tests, the k-sample Anderson-Darling tests and the
/// mass-size fits use only the leaves at or above a common mass in every population. Three
/// invented catalogues of fixtures/populations/tests_above.json are compared with the cut, and
/// the statistics equal scipy 1.17.1's on the cut samples (ks_2samp with method 'auto',
/// anderson_ksamp with variant 'midrank', linregress of log10 M on log10 R), to 1e-10 relative
/// as in populations_reference.rs; the Anderson-Darling tests are checked so in tests.csv and
/// to half a unit of the third decimal in the report, and differ there from scipy's on every
/// leaf, which the comparison without the cut gives.
#[test]
fn tests_above_a_common_mass_match_scipy_on_the_cut_samples() {
    use common::{assert_close, fixture_json, num, nums};
    let f = fixture_json("populations/tests_above.json");
    let d = tempfile::tempdir().unwrap();
    let pops = f["populations"].as_object().unwrap();
    let mut names = vec![];
    for (name, p) in pops {
        let mut text = String::from("kind,mass_excess,radius_pc\n");
        for (r, m) in nums(&p["radius"]).iter().zip(nums(&p["mass"])) {
            text += &format!("leaf,{m:?},{r:?}\n");
        }
        std::fs::create_dir(d.path().join(name)).unwrap();
        std::fs::write(d.path().join(name).join("structures.csv"), text).unwrap();
        names.push(name.as_str());
    }
    let cut = format!("{}Msun", num(&f["cut"]));
    let compare = |out: &str, extra: &[&str]| {
        let mut args = vec!["compare"];
        args.extend_from_slice(&names);
        args.extend_from_slice(&["-o", out, "--resamples", "20"]);
        args.extend_from_slice(extra);
        let (code, _, err) = run(d.path(), &args);
        assert_eq!(code, 0, "{err}");
        std::fs::read_to_string(d.path().join(out).join("report.md")).unwrap()
    };
    let table = |path: &str| -> Vec<Vec<String>> {
        std::fs::read_to_string(d.path().join(path))
            .unwrap()
            .lines()
            .filter(|l| !l.starts_with('#'))
            .map(|l| l.split(',').map(str::to_string).collect())
            .collect()
    };
    let value = |rows: &[Vec<String>], row: usize, name: &str| -> f64 {
        let c = rows[0].iter().position(|c| c == name).unwrap();
        rows[row][c].parse().unwrap()
    };
    // The Anderson-Darling statistic and p-value the report gives on masses or radii (to
    // three decimals; tests.csv holds them in full).
    let anderson = |report: &str, what: &str| -> (f64, f64) {
        let key = format!(
            "k-sample Anderson-Darling test on {what} (Scholz & Stephens 1987, midrank; full precision in tests.csv): statistic "
        );
        let rest = &report[report.find(&key).unwrap() + key.len()..];
        let (stat, rest) = rest.split_once(", p-value ").unwrap();
        // The p-value, up to the sentence's end or the note on capping.
        let p: String = rest
            .chars()
            .take_while(|c| c.is_ascii_digit() || *c == '.')
            .collect();
        (
            stat.parse().unwrap(),
            p.trim_end_matches('.').parse().unwrap(),
        )
    };

    let report = compare("cut", &["--tests-above", &cut]);
    // The mass-size plot shows the leaves below the cut pale, marks the cut with a line and
    // says so in a note; without a cut it has none of these.
    let svg =
        |out: &str| std::fs::read_to_string(d.path().join(out).join("mass_size.svg")).unwrap();
    let cut_svg = svg("cut");
    assert!(cut_svg.contains(" faded\""), "no pale markers");
    assert!(
        cut_svg.contains(&format!(
            "aria-label=\"fits above {} Msun\"",
            num(&f["cut"])
        )),
        "no line at the cut"
    );
    assert!(cut_svg.contains("pale points: leaves below"), "no note");
    let tests = table("cut/tests.csv");
    let pairs = f["pairs"].as_array().unwrap();
    assert_eq!(tests.len() - 1, pairs.len());
    for (i, pair) in pairs.iter().enumerate() {
        let row = i + 1;
        assert_eq!(tests[row][0], pair["a"].as_str().unwrap());
        assert_eq!(tests[row][1], pair["b"].as_str().unwrap());
        for (key, what) in [("mass", "ks_mass"), ("radius", "ks_radius")] {
            let reference = &pair[key]["auto"];
            for (suffix, field) in [("d", "statistic"), ("p", "pvalue")] {
                assert_close(
                    value(&tests, row, &format!("{what}_{suffix}")),
                    num(&reference[field]),
                    1e-10,
                    0.0,
                    &format!(
                        "{}-{} {what}_{suffix} (scipy 1.17.1 ks_2samp)",
                        tests[row][0], tests[row][1]
                    ),
                );
            }
        }
    }
    let summary = table("cut/populations.csv");
    let mut gof_checked = 0;
    for (row, name) in names.iter().enumerate().map(|(i, n)| (i + 1, n)) {
        assert_eq!(summary[row][0], *name);
        // The tail's goodness of fit is the library's (checked against the powerlaw package's
        // bootstrap in populations_reference.rs) on every leaf, with compare's settings.
        let masses = nums(&pops[*name]["mass"]);
        let search = cairn::populations::XminSearch {
            alpha_range: (1.0, 3.0),
            ..Default::default()
        };
        // compare gives no slope (nor its goodness of fit) to a tail of fewer than 10 leaves.
        if let Ok(fit) = cairn::populations::fit_power_law(&masses, None, &search)
            && fit.n_tail >= cairn::compare::MIN_TAIL
        {
            let boot = cairn::populations::Bootstrap {
                resamples: 20,
                seed: 1,
            };
            let gof =
                cairn::populations::goodness_of_fit(&masses, &fit, None, &search, &boot, &|| {})
                    .unwrap();
            assert_eq!(value(&summary, row, "tail_gof_p"), gof.p_value, "{name}");
            gof_checked += 1;
        }
        assert_eq!(
            value(&summary, row, "n_tested") as u64,
            f["n_kept"][name].as_u64().unwrap(),
            "{name}: leaves at or above the cut"
        );
        let reference = &f["linregress"][name];
        for (column, key) in [
            ("mass_size_slope", "slope"),
            ("mass_size_slope_err", "stderr"),
            ("mass_size_intercept", "intercept"),
        ] {
            assert_close(
                value(&summary, row, column),
                num(&reference[key]),
                1e-10,
                0.0,
                &format!("{name}: {column} (scipy 1.17.1 linregress)"),
            );
        }
    }
    assert!(gof_checked > 0, "no population had a tail");
    // Each pair's slope difference (its size) is in units of the slopes' uncertainties combined
    // in quadrature, each the bootstrap's spread or the least-squares error as
    // mass_size_slope_err_from says (the slopes themselves checked against scipy above).
    let mut from_bootstrap = 0;
    for row in 1..tests.len() {
        let r_of = |name: &str| (1..summary.len()).find(|&r| summary[r][0] == name).unwrap();
        let of = |name: &str, column: &str| value(&summary, r_of(name), column);
        let error = |name: &str| {
            let c = summary[0]
                .iter()
                .position(|c| c == "mass_size_slope_err_from")
                .unwrap();
            match summary[r_of(name)][c].as_str() {
                "bootstrap" => of(name, "mass_size_slope_err_boot"),
                "least squares" => of(name, "mass_size_slope_err"),
                other => panic!("{name}: mass_size_slope_err_from {other}"),
            }
        };
        let (a, b) = (tests[row][0].as_str(), tests[row][1].as_str());
        let difference = of(a, "mass_size_slope") - of(b, "mass_size_slope");
        let spread = error(a).hypot(error(b));
        from_bootstrap += [a, b]
            .iter()
            .filter(|n| error(n) == of(n, "mass_size_slope_err_boot"))
            .count();
        assert_close(
            value(&tests, row, "mass_size_diff_sigma"),
            difference.abs() / spread,
            1e-9,
            0.0,
            &format!("{a}-{b} mass_size_diff_sigma"),
        );
        // The significance is the size of the signed difference over its uncertainty (in
        // sigma, never negative), for the tail exponents as for the slopes.
        let alpha = value(&tests, row, "alpha_diff");
        if alpha.is_finite() {
            assert_close(
                value(&tests, row, "alpha_diff_sigma"),
                alpha.abs() / value(&tests, row, "alpha_diff_err"),
                1e-9,
                0.0,
                &format!("{a}-{b} alpha_diff_sigma"),
            );
        }
        assert!(value(&tests, row, "mass_size_diff_sigma") >= 0.0);
    }
    assert!(from_bootstrap > 0, "no slope's bootstrap spread was used");
    // The column descriptions and the report's header say so, rather than read as an
    // uncertainty.
    let text = std::fs::read_to_string(d.path().join("cut/tests.csv")).unwrap();
    for (column, ratio) in [
        (
            "alpha_diff_sigma",
            "|alpha_diff| / alpha_diff_err, in sigma",
        ),
        (
            "mass_size_diff_sigma",
            "|mass_size_diff| / its combined uncertainty",
        ),
    ] {
        assert!(
            text.lines().any(
                |l| l.starts_with(&format!("# column {column}: significance")) && l.contains(ratio)
            ),
            "{column}: {text}"
        );
    }
    assert!(
        report.contains("| alpha(a) - alpha(b) | significance, \\|diff\\| / uncertainty [sigma] |")
            && !report.contains("| sigma |"),
        "{report}"
    );
    for what in ["mass", "radius"] {
        let plural = if what == "mass" { "masses" } else { "radii" };
        let (stat, p) = anderson(&report, plural);
        let reference = &f["anderson"][what];
        let every = &f["anderson_every_leaf"][what];
        assert!(
            (stat - num(&reference["statistic"])).abs() <= 5e-4,
            "{what}: Anderson-Darling statistic {stat} (scipy 1.17.1: {})",
            reference["statistic"]
        );
        assert!(
            (p - num(&reference["pvalue"])).abs() <= 5e-4,
            "{what}: p {p}"
        );
        // tests.csv holds them in full, the same on every row, against scipy 1.17.1's
        // anderson_ksamp(variant='midrank') to 1e-10 (as in populations_reference.rs), with
        // scipy's capping of the p-value.
        for row in 1..tests.len() {
            for (column, key) in [("statistic", "statistic"), ("p", "pvalue")] {
                assert_close(
                    value(&tests, row, &format!("ad_{what}_{column}")),
                    num(&reference[key]),
                    1e-10,
                    0.0,
                    &format!("tests.csv ad_{what}_{column} (scipy 1.17.1 anderson_ksamp)"),
                );
            }
            let c = tests[0]
                .iter()
                .position(|c| *c == format!("ad_{what}_p_capped"))
                .unwrap();
            assert_eq!(
                tests[row][c],
                reference["capped"].as_bool().unwrap().to_string(),
                "{what}: capped"
            );
        }
        // The cut changes the statistic beyond the report's precision.
        assert!((num(&every["statistic"]) - num(&reference["statistic"])).abs() > 1e-2);
    }
    // The cut is said: in the report, the tables' notes and the population with few leaves.
    assert!(
        report.contains("Common lower mass:") && report.contains("at least 1 Msun"),
        "{report}"
    );
    assert!(
        report.contains("C: only 4 leaves lie at or above --tests-above 1 Msun"),
        "{report}"
    );
    for file in ["cut/populations.csv", "cut/tests.csv"] {
        let text = std::fs::read_to_string(d.path().join(file)).unwrap();
        assert!(
            text.lines()
                .any(|l| l.starts_with("# note:") && l.contains("--tests-above")),
            "{file}"
        );
    }

    // Without the cut every leaf is tested: scipy's Anderson-Darling statistics on every leaf.
    let report = compare("every", &[]);
    let every_svg = svg("every");
    assert!(
        !every_svg.contains(" faded\"") && !every_svg.contains("fits above"),
        "pale markers or a cut line without a cut"
    );
    for what in ["mass", "radius"] {
        let plural = if what == "mass" { "masses" } else { "radii" };
        let (stat, _) = anderson(&report, plural);
        let every = num(&f["anderson_every_leaf"][what]["statistic"]);
        assert!(
            (stat - every).abs() <= 5e-4,
            "{what}: {stat} against {every}"
        );
    }
    // No cut is said to be used (the completeness caution names the option as advice only).
    assert!(
        !report.contains("Common lower mass") && !report.contains("(--tests-above)"),
        "{report}"
    );

    // A cut that is not a positive mass is refused in one sentence, with nothing written.
    for bad in ["0Msun", "-1Msun", "0.5pc", "heavy"] {
        let mut args = vec!["compare"];
        args.extend_from_slice(&names);
        args.extend_from_slice(&["-o", "bad", "--tests-above", bad]);
        let o = cli::cairn(&args, d.path());
        cli::check_refused(&o, &args, "--tests-above", bad);
        assert!(!d.path().join("bad").exists());
    }
    // So is a cut above the leaves of all populations but one: nothing can be tested.
    let mut args = vec!["compare"];
    args.extend_from_slice(&names);
    args.extend_from_slice(&["-o", "bad", "--tests-above", "1e6Msun"]);
    let o = cli::cairn(&args, d.path());
    cli::check_refused(&o, &args, "--tests-above", "leaves no population");
    assert!(!d.path().join("bad").exists());
}

/// Catalogue files are named by their file name (a run's own structures.csv by its folder),
/// so two catalogues of one folder compare without --label; one without a run record beside it
/// is said so once, instead of one "differs" per assumption; and the run's FITS table, given
/// instead of its CSV, is refused with a sentence naming the CSV.
#[test]
fn compare_names_catalogue_files_and_says_once_when_a_run_record_is_missing() {
    let d = tempfile::tempdir().unwrap();
    let a = cli::demo_run(d.path(), "a", &[]);
    std::fs::create_dir(d.path().join("cut")).unwrap();
    std::fs::copy(a.join("structures.csv"), d.path().join("cut/north.csv")).unwrap();
    std::fs::copy(a.join("structures.csv"), d.path().join("cut/south.csv")).unwrap();
    let args = [
        "compare",
        "a/structures.csv",
        "cut/north.csv",
        "cut/south.csv",
        "-o",
        "cmp",
        "--resamples",
        "20",
    ];
    let o = cli::cairn_limited(&args, d.path(), 2_000_000);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let populations = std::fs::read_to_string(d.path().join("cmp/populations.csv")).unwrap();
    for label in ["\na,", "\nnorth,", "\nsouth,"] {
        assert!(populations.contains(label), "{label}: {populations}");
    }
    let warnings: Vec<&str> = o
        .stderr
        .lines()
        .filter(|l| l.starts_with("warning: "))
        .collect();
    assert!(
        warnings.iter().any(|w| w.contains(
            "north, south have no run.json beside their catalogues, so their resolution"
        )),
        "{}",
        o.stderr
    );
    assert!(
        !o.stderr.contains("differs") && !o.stderr.contains("unknown for some"),
        "{}",
        o.stderr
    );
    // The FITS table instead of the CSV.
    let args = [
        "compare",
        "a/structures.fits",
        "cut/north.csv",
        "-o",
        "cmp2",
    ];
    let o = cli::cairn_limited(&args, d.path(), 2_000_000);
    cli::check_refused(
        &o,
        &args,
        "structures.fits",
        "give the run folder or structures.csv",
    );
    assert!(!d.path().join("cmp2").exists());
}

/// A catalogue of leaves measured over their grown footprints (`segment --grow-leaves`) is
/// named by its run's folder and "-grown", and compared beside a catalogue over the leaves'
/// own footprints only with a warning: the grown masses are taken down to the floor.
#[test]
fn compare_warns_when_grown_and_own_footprints_are_mixed() {
    let d = tempfile::tempdir().unwrap();
    cli::demo_run(d.path(), "a", &["--grow-leaves"]);
    let args = [
        "compare",
        "a/structures-grown.csv",
        "a",
        "-o",
        "cmp",
        "--resamples",
        "20",
    ];
    let o = cli::cairn_limited(&args, d.path(), 2_000_000);
    assert_eq!(o.code, 0, "{}", o.stderr);
    let populations = std::fs::read_to_string(d.path().join("cmp/populations.csv")).unwrap();
    assert!(populations.contains("\na-grown,"), "{populations}");
    assert!(
        o.stderr
            .contains("warning: a-grown holds leaves measured over their grown footprints"),
        "{}",
        o.stderr
    );
    // Two catalogues of one kind: no such warning.
    let args = [
        "compare",
        "a/structures-grown.csv",
        "a/structures-grown.csv",
        "--label",
        "x",
        "--label",
        "y",
        "-o",
        "cmp2",
        "--resamples",
        "20",
    ];
    let o = cli::cairn_limited(&args, d.path(), 2_000_000);
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!o.stderr.contains("grown footprints"), "{}", o.stderr);
}

#[path = "common/svg_layout.rs"]
mod svg_layout;

/// The mass-size plot of the two demo maps (column density and 850 um emission, as a user
/// would compare them): each line of constant column density and each Bonnor-Ebert line has
/// its label inside the frame, clear of the other labels, and written along its own line
/// (centred on it, the baseline parallel to it, the line cut under it, clear of every other
/// line), or, only where no place along the line is clear of the frame and the other lines,
/// level beside it with its own line clearly the nearest. Read from the SVG.
#[test]
fn mass_size_guide_labels_are_written_along_their_own_lines() {
    let d = tempfile::tempdir().unwrap();
    let maps = std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps");
    for (name, map) in [
        ("colrun", "velloran-column.fits"),
        ("emrun", "velloran-850um.fits"),
    ] {
        let (code, _, err) = run(
            d.path(),
            &[
                "segment",
                maps.join(map).to_str().unwrap(),
                "-o",
                name,
                "--distance",
                "410pc",
                "--temperature",
                "14K",
                "--no-figure",
                "-q",
            ],
        );
        assert_eq!(code, 0, "{err}");
    }
    // The default width and a wider one (at 800 pixels, 9-point text in 300 dpi leaves no
    // clear place along or beside these five crossing lines, and the labels take the least
    // crowded).
    for width in ["1200", "2000"] {
        let out = format!("cmp{width}");
        let (code, _, err) = run(
            d.path(),
            &[
                "compare", "colrun", "emrun", "-o", &out, "--width", width, "-q",
            ],
        );
        assert_eq!(code, 0, "{err}");
        let svg = std::fs::read_to_string(d.path().join(&out).join("mass_size.svg")).unwrap();
        // Font sizes are fixed in points at 300 dpi: 9 pt text, labels 0.9 of it.
        let fs = 9.0 * 300.0 / 72.0;
        let lfs = 0.9 * fs;
        let rules = svg_layout::LabelRules {
            lfs,
            margin: 0.24 * fs,
            clear: 0.29 * fs,
            on: 0.05 * lfs,
            degrees: 1.5,
            near: 0.8 * lfs,
            beside: 0.5 * lfs,
        };
        let placed = svg_layout::check_guide_labels(&svg, rules);
        // The lines with room along them (most of them) are labelled along themselves.
        let along = placed
            .iter()
            .filter(|(_, p)| matches!(p, svg_layout::Placed::Along(_)))
            .count();
        assert!(along >= 3, "{placed:?}");
    }
}

/// A FITS file given for a run: a run's FITS catalogue points to its CSV beside it, a map
/// (no catalogue beside it) to the run folder; exit 2, nothing written.
#[test]
fn a_fits_file_given_for_a_run_gets_the_right_advice() {
    let d = tempfile::tempdir().unwrap();
    let map =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let m = map.to_str().unwrap();
    let (code, _, err) = run(
        d.path(),
        &[
            "segment",
            m,
            "-o",
            "a",
            "--distance",
            "300pc",
            "--no-figure",
            "-q",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = run(d.path(), &["compare", "a/structures.fits", "a", "-o", "c1"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("give the run folder or structures.csv."),
        "{err}"
    );
    let (code, _, err) = run(d.path(), &["compare", m, "a", "-o", "c2"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("give the folder cairn segment wrote (or its structures.csv)."),
        "{err}"
    );
    assert!(!d.path().join("c1").exists() && !d.path().join("c2").exists());
}

/// A hand-made catalogue: one leaf per row of (mass, radius in pc, state), with the columns
/// compare reads (`mass` twice `mass_excess`, so the two columns can be told apart).
fn catalogue(path: &std::path::Path, leaves: &[(f64, f64, &str)]) {
    let mut text = String::from("kind,mass_excess,mass,radius_pc,state,density\n");
    for (m, r, s) in leaves {
        let m = if m.is_nan() {
            String::new()
        } else {
            format!("{m:?}")
        };
        let whole = m
            .parse::<f64>()
            .map_or(String::new(), |m| format!("{:?}", 2.0 * m));
        text += &format!("leaf,{m},{whole},{r:?},{s},100000.0\n");
    }
    std::fs::write(path, text).unwrap();
}

/// n masses of a power law with exponent `alpha` above `xmin` at the quantiles (k + 1/2) / n,
/// by inversion of its cumulative distribution (Clauset, Shalizi & Newman 2009, eq. D.4),
/// with radii growing with mass (M ~ R^2), so every fit exists.
fn power_law_leaves(n: usize, xmin: f64, alpha: f64) -> Vec<(f64, f64, &'static str)> {
    (0..n)
        .map(|k| {
            let u = (k as f64 + 0.5) / n as f64;
            let m = xmin * (1.0 - u).powf(-1.0 / (alpha - 1.0));
            let wobble = 1.0 + 0.2 * ((k * 7919) % 13) as f64 / 13.0;
            (m, 0.05 * m.sqrt() * wobble, "unknown")
        })
        .collect()
}

/// The rows of a CSV table written by compare (`#` lines skipped), by column name.
fn rows(path: &std::path::Path) -> Vec<std::collections::HashMap<String, String>> {
    common::read_csv(path)
}

/// The number in column `k` of `row`, NaN when the cell is empty.
fn cell(row: &std::collections::HashMap<String, String>, k: &str) -> f64 {
    let v = row.get(k).unwrap_or_else(|| panic!("no column {k}"));
    if v.is_empty() {
        f64::NAN
    } else {
        v.parse().unwrap()
    }
}

/// Many equal values do not crash compare (the percentiles were a recursive quickselect that
/// overflowed the stack): two catalogues of 30,000 leaves of one mass and one density (a
/// constant column) give the median of equal values, that value (numpy 2.4.6's percentile of
/// 30,000 equal values, fixtures/populations/percentiles.json), say that equal masses have no
/// tail and that the k-sample test on them was not made (scipy 1.17.1's anderson_ksamp refuses
/// samples of one value); and 15,000 bootstrap resamples with a fixed --mass-min, whose lower
/// masses are then all that mass (so their spread is 0), run to the end.
#[test]
fn many_equal_values_and_a_long_bootstrap_of_a_fixed_lower_mass_run_to_the_end() {
    let d = tempfile::tempdir().unwrap();
    catalogue(
        &d.path().join("flat.csv"),
        &vec![(2.0, 0.05, "unknown"); 30_000],
    );
    catalogue(
        &d.path().join("level.csv"),
        &vec![(2.0, 0.06, "bound"); 30_000],
    );
    let args = [
        "compare",
        "flat.csv",
        "level.csv",
        "-o",
        "equal",
        "--resamples",
        "20",
    ];
    let o = cli::cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    for row in rows(&d.path().join("equal/populations.csv")) {
        assert_eq!(cell(&row, "median_density"), 100000.0);
        assert_eq!(cell(&row, "median_mass"), 2.0);
        assert!(cell(&row, "alpha").is_nan());
    }
    for label in ["flat", "level"] {
        assert!(
            o.stdout.contains(&format!("{label}: 30000 leaves, no tail fit"))
                && o.stdout.contains(
                    "all 30000 masses are equal (2.000 Msun), so there is no tail to fit; check that the catalogue's mass_excess column holds the leaves' masses"
                ),
            "{}",
            o.stdout
        );
    }
    assert!(!o.stdout.contains("--alpha-max"), "{}", o.stdout);
    let report = std::fs::read_to_string(d.path().join("equal/report.md")).unwrap();
    assert!(
        report.contains("k-sample Anderson-Darling test on masses: not made, as every one of the masses is the same (2.000)"),
        "{report}"
    );
    let tests = std::fs::read_to_string(d.path().join("equal/tests.csv")).unwrap();
    assert!(
        tests.contains("# note: the k-sample Anderson-Darling test on masses was not made"),
        "{tests}"
    );
    let t = rows(&d.path().join("equal/tests.csv"));
    assert!(
        cell(&t[0], "ad_mass_statistic").is_nan() && cell(&t[0], "ad_radius_statistic").is_finite()
    );

    catalogue(&d.path().join("a.csv"), &power_law_leaves(200, 0.5, 2.35));
    catalogue(&d.path().join("b.csv"), &power_law_leaves(150, 0.5, 2.0));
    let args = [
        "compare",
        "a.csv",
        "b.csv",
        "-o",
        "long",
        "--mass-min",
        "0.5Msun",
        "--resamples",
        "15000",
    ];
    let o = cli::cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    for row in rows(&d.path().join("long/populations.csv")) {
        assert_eq!(cell(&row, "mass_min"), 0.5);
        assert_eq!(cell(&row, "mass_min_err_boot"), 0.0);
        assert_eq!(row["alpha_err_from"], "bootstrap");
        assert_eq!(cell(&row, "tail_boot_fitted"), 15000.0);
    }
}

/// A tail too small for a slope is given none, and a bootstrap that cannot measure the spread
/// of alpha gives way to the analytic (alpha - 1)/sqrt(n_tail) (Clauset, Shalizi & Newman 2009,
/// eq. 3.2), said in the summary, the report and alpha_err_from; no uncertainty is NaN or
/// zero, and no significance is computed from one.
#[test]
fn small_tails_and_bootstraps_without_a_spread_are_said_and_never_reported_as_an_error() {
    let d = tempfile::tempdir().unwrap();
    // Three leaves each: every resample that can be searched holds the same three masses.
    catalogue(
        &d.path().join("tiny_a.csv"),
        &[
            (1.0, 0.05, "unknown"),
            (2.0, 0.06, "unknown"),
            (5.0, 0.07, "unknown"),
        ],
    );
    catalogue(
        &d.path().join("tiny_b.csv"),
        &[
            (1.5, 0.05, "unknown"),
            (2.5, 0.06, "unknown"),
            (6.0, 0.07, "unknown"),
        ],
    );
    let o = cli::cairn(
        &[
            "compare",
            "tiny_a.csv",
            "tiny_b.csv",
            "-o",
            "tiny",
            "--resamples",
            "50",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains("tiny_a: 3 leaves, no tail fit")
            && o.stdout.contains(
                "no power-law slope: the population has 3 leaves, fewer than the 10 a slope needs"
            ),
        "{}",
        o.stdout
    );
    let t = rows(&d.path().join("tiny/tests.csv"));
    assert!(cell(&t[0], "alpha_diff_sigma").is_nan() && cell(&t[0], "alpha_diff_err").is_nan());

    catalogue(&d.path().join("a.csv"), &power_law_leaves(200, 0.5, 2.35));
    catalogue(&d.path().join("b.csv"), &power_law_leaves(150, 0.5, 2.0));
    // A fixed lower mass with two leaves above it.
    let o = cli::cairn(
        &[
            "compare",
            "a.csv",
            "b.csv",
            "-o",
            "high",
            "--mass-min",
            "15Msun",
            "--resamples",
            "50",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let above = power_law_leaves(200, 0.5, 2.35)
        .iter()
        .filter(|l| l.0 >= 15.0)
        .count();
    assert!((1..10).contains(&above), "{above}");
    assert!(
        o.stdout.contains(&format!(
            "a: 200 leaves, no tail fit\n  no power-law slope: only {above} leaves lie at or above --mass-min 15 Msun, fewer than the 10 a slope needs"
        )) && o.stdout.contains("give a smaller --mass-min"),
        "{}",
        o.stdout
    );

    // Two resamples: fewer than a spread needs.
    let o = cli::cairn(
        &["compare", "a.csv", "b.csv", "-o", "two", "--resamples", "2"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let svg = std::fs::read_to_string(d.path().join("two/mass_functions.svg")).unwrap();
    assert!(
        !svg.contains("NaN") && !o.stdout.contains("NaN"),
        "{}",
        o.stdout
    );
    let p = rows(&d.path().join("two/populations.csv"));
    let mut errors = vec![];
    for row in &p {
        let (alpha, n_tail) = (cell(row, "alpha"), cell(row, "n_tail"));
        let analytic = (alpha - 1.0) / n_tail.sqrt();
        assert!((cell(row, "alpha_err") - analytic).abs() <= 1e-12 * analytic);
        assert_eq!(row["alpha_err_from"], "analytic");
        assert!(cell(row, "alpha_err_boot").is_nan());
        let said = format!("alpha {alpha:.2} +/- {analytic:.2} (analytic)");
        assert!(o.stdout.contains(&said), "{said}: {}", o.stdout);
        assert!(
            svg.contains(&format!("alpha = {alpha:.2} ± {analytic:.2} above")),
            "{said}"
        );
        errors.push((alpha, analytic));
    }
    assert!(
        o.stdout.contains("2 of 2 bootstrap resamples gave a tail, fewer than the 20 a spread needs (give more --resamples), so the uncertainty of alpha is the analytic"),
        "{}",
        o.stdout
    );
    let t = rows(&d.path().join("two/tests.csv"));
    let combined = errors[0].1.hypot(errors[1].1);
    assert!((cell(&t[0], "alpha_diff_err") - combined).abs() <= 1e-12 * combined);

    // Resamples that differ but give one alpha: 15 leaves of 3 Msun above a fixed 1 Msun give
    // alpha = 1 + n / (n ln 3) = 1 + 1/ln 3 whatever n (CSN eq. 3.1), so the bootstrap has no
    // spread beyond rounding.
    let mut steps = vec![(0.5, 0.04, "unknown"); 5];
    steps.extend(vec![(3.0, 0.08, "unknown"); 15]);
    catalogue(&d.path().join("steps.csv"), &steps);
    let o = cli::cairn(
        &[
            "compare",
            "steps.csv",
            "a.csv",
            "-o",
            "steps",
            "--mass-min",
            "1Msun",
            "--resamples",
            "50",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains("every bootstrap resample gave the same alpha (the resamples differ only in order), so the bootstrap cannot measure its spread and the uncertainty of alpha is the analytic"),
        "{}",
        o.stdout
    );
    let p = rows(&d.path().join("steps/populations.csv"));
    let alpha = 1.0 + 1.0 / 3f64.ln();
    assert!((cell(&p[0], "alpha") - alpha).abs() <= 1e-12 * alpha);
    assert_eq!(p[0]["alpha_err_from"], "analytic");
    let analytic = (alpha - 1.0) / 15f64.sqrt();
    assert!((cell(&p[0], "alpha_err") - analytic).abs() <= 1e-12 * analytic);
    assert!(!o.stdout.contains("+/- 0.00"), "{}", o.stdout);
    let t = rows(&d.path().join("steps/tests.csv"));
    let (diff, err) = (cell(&t[0], "alpha_diff"), cell(&t[0], "alpha_diff_err"));
    assert!(err >= analytic, "{err}");
    assert!((cell(&t[0], "alpha_diff_sigma") - diff.abs() / err).abs() <= 1e-12 * diff.abs() / err);
}

/// The advice when no tail is found fits the case: a fixed lower mass above every leaf asks
/// for a smaller --mass-min (not a larger --alpha-max, which a fixed lower mass does not use),
/// and equal masses ask for the mass column to be checked (above: the equal-masses test).
#[test]
fn the_advice_for_a_missing_tail_fits_the_case() {
    let d = tempfile::tempdir().unwrap();
    catalogue(&d.path().join("a.csv"), &power_law_leaves(200, 0.5, 2.35));
    catalogue(&d.path().join("b.csv"), &power_law_leaves(150, 0.5, 2.0));
    let heaviest = power_law_leaves(200, 0.5, 2.35)
        .iter()
        .fold(0.0f64, |m, l| m.max(l.0));
    let o = cli::cairn(
        &[
            "compare",
            "a.csv",
            "b.csv",
            "-o",
            "c",
            "--mass-min",
            "1000Msun",
            "--resamples",
            "20",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains(&format!(
            "no power-law tail: no leaf lies above --mass-min 1000 Msun (the heaviest has {heaviest:.3} Msun); give a smaller --mass-min"
        )),
        "{}",
        o.stdout
    );
    assert!(!o.stdout.contains("--alpha-max"), "{}", o.stdout);
}

/// The column compared is said in the report and in every table's header, and is the one
/// whose medians the table gives (the hand-made `mass` is twice `mass_excess`).
#[test]
fn the_mass_column_compared_is_said_and_used() {
    let d = tempfile::tempdir().unwrap();
    catalogue(&d.path().join("a.csv"), &power_law_leaves(60, 0.5, 2.35));
    catalogue(&d.path().join("b.csv"), &power_law_leaves(50, 0.5, 2.0));
    for (out, column) in [("excess", "mass_excess"), ("whole", "mass")] {
        let mut args = vec!["compare", "a.csv", "b.csv", "-o", out, "--resamples", "20"];
        if column == "mass" {
            args.extend_from_slice(&["--mass-column", "mass"]);
        }
        let o = cli::cairn(&args, d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
        let report = std::fs::read_to_string(d.path().join(out).join("report.md")).unwrap();
        assert!(
            report.contains(&format!(
                "their masses are the catalogues' `{column}` column"
            )),
            "{report}"
        );
        for table in [
            "populations.csv",
            "mass_functions.csv",
            "tests.csv",
            "cumulative.csv",
        ] {
            let text = std::fs::read_to_string(d.path().join(out).join(table)).unwrap();
            assert!(
                text.lines()
                    .any(|l| l.starts_with(&format!("# parameter mass_column = {column}  ("))),
                "{table}: {text}"
            );
        }
        // The median of 60 masses at the quantiles (k + 1/2)/60: the mean of the 30th and 31st
        // (numpy's linear percentile at 50), of the column compared.
        let masses = power_law_leaves(60, 0.5, 2.35);
        let factor = if column == "mass" { 2.0 } else { 1.0 };
        let median = factor * 0.5 * (masses[29].0 + masses[30].0);
        let p = rows(&d.path().join(out).join("populations.csv"));
        assert!((cell(&p[0], "median_mass") - median).abs() <= 1e-12 * median);
    }
}

/// The state counts add up to the leaves compared: of 20 leaves, 8 without a mass are left out
/// (n_dropped), and the states of the other 12 alone are counted, a leaf without a state as
/// unknown.
#[test]
fn state_counts_add_up_to_the_leaves_compared() {
    let d = tempfile::tempdir().unwrap();
    let mut leaves = vec![];
    let states = ["bound", "marginal", "unbound", "unknown", ""];
    for k in 0..20 {
        let m = if k % 5 == 1 || k % 5 == 3 {
            f64::NAN
        } else {
            1.0 + k as f64
        };
        leaves.push((m, 0.05 + 0.001 * k as f64, states[k % 5]));
    }
    catalogue(&d.path().join("a.csv"), &leaves);
    catalogue(&d.path().join("b.csv"), &power_law_leaves(50, 0.5, 2.0));
    let o = cli::cairn(
        &["compare", "a.csv", "b.csv", "-o", "c", "--resamples", "20"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let p = rows(&d.path().join("c/populations.csv"));
    let kept: Vec<&str> = leaves
        .iter()
        .filter(|l| !l.0.is_nan())
        .map(|l| if l.2.is_empty() { "unknown" } else { l.2 })
        .collect();
    assert_eq!((cell(&p[0], "n"), cell(&p[0], "n_dropped")), (12.0, 8.0));
    let mut total = 0.0;
    for st in ["bound", "marginal", "unbound", "unknown"] {
        let want = kept.iter().filter(|s| **s == st).count() as f64;
        assert_eq!(cell(&p[0], &format!("n_{st}")), want, "{st}");
        total += want;
    }
    assert_eq!(total, 12.0);
    let report = std::fs::read_to_string(d.path().join("c/report.md")).unwrap();
    assert!(
        report.contains("| a | `a.csv` | 12 | 4 | 0 | 4 | 4 | 8 |"),
        "{report}"
    );
}

/// Every CSV table compare writes is read by a CSV reader told that `#` starts a comment (as
/// astropy 8.0.2's `Table.read(f, format='ascii.csv', comment='#')`, which the README gives,
/// read these tables when checked by hand): the `#` lines come first, then one header row
/// whose names the `# column` lines give in order, then rows of as many fields, each number
/// readable or empty.
#[test]
fn the_tables_are_comment_lines_then_a_plain_csv() {
    let d = tempfile::tempdir().unwrap();
    catalogue(&d.path().join("a.csv"), &power_law_leaves(80, 0.5, 2.35));
    catalogue(&d.path().join("b.csv"), &power_law_leaves(60, 0.5, 2.0));
    let o = cli::cairn(
        &["compare", "a.csv", "b.csv", "-o", "c", "--resamples", "20"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    for table in [
        "populations.csv",
        "mass_functions.csv",
        "tests.csv",
        "cumulative.csv",
    ] {
        let text = std::fs::read_to_string(d.path().join("c").join(table)).unwrap();
        let comments = text.lines().take_while(|l| l.starts_with('#')).count();
        let rest: Vec<&str> = text.lines().skip(comments).collect();
        assert!(rest.iter().all(|l| !l.starts_with('#')), "{table}");
        let header: Vec<&str> = rest[0].split(',').collect();
        let described: Vec<&str> = text
            .lines()
            .filter_map(|l| l.strip_prefix("# column "))
            .map(|l| l.split([' ', ':']).next().unwrap())
            .collect();
        assert_eq!(header, described, "{table}");
        assert!(rest.len() > 1, "{table}");
        for row in &rest[1..] {
            let fields: Vec<&str> = row.split(',').collect();
            assert_eq!(fields.len(), header.len(), "{table}: {row}");
        }
    }
}

/// Masses below zero (a map whose zero lies below no emission) are refused in one sentence
/// that names the file, says the masses are below zero and gives the remedy (mass_excess, for
/// the whole footprint's mass); exit 2, nothing written.
#[test]
fn negative_masses_are_refused_with_the_reason_and_the_remedy() {
    let d = tempfile::tempdir().unwrap();
    catalogue(
        &d.path().join("neg.csv"),
        &[
            (-1.0, 0.05, "unknown"),
            (-2.0, 0.06, "unknown"),
            (-3.0, 0.07, "unknown"),
        ],
    );
    catalogue(&d.path().join("b.csv"), &power_law_leaves(50, 0.5, 2.0));
    let args = ["compare", "neg.csv", "b.csv", "-o", "c"];
    let o = cli::cairn(&args, d.path());
    cli::check_refused(
        &o,
        &args,
        "neg.csv",
        "none with a positive mass_excess and radius (3 with a mass_excess of zero or below)",
    );
    assert!(
        o.stderr.contains("below zero") && o.stderr.contains("a map whose zero is no emission"),
        "{}",
        o.stderr
    );
    let args = [
        "compare",
        "neg.csv",
        "b.csv",
        "-o",
        "c",
        "--mass-column",
        "mass",
    ];
    let o = cli::cairn(&args, d.path());
    cli::check_refused(&o, &args, "neg.csv", "compare mass_excess (the default)");
    assert!(!d.path().join("c").exists());
}

/// Populations that are not independent samples are warned about: the same catalogue under
/// two labels (D = 0 and p = 1 between them, scipy's ks_2samp of a sample with itself), and a
/// copy of it (the same leaves).
#[test]
fn the_same_leaves_twice_are_warned_about() {
    let d = tempfile::tempdir().unwrap();
    catalogue(&d.path().join("a.csv"), &power_law_leaves(60, 0.5, 2.35));
    std::fs::copy(d.path().join("a.csv"), d.path().join("copy.csv")).unwrap();
    let args = [
        "compare",
        "a.csv",
        "a.csv",
        "--label",
        "A",
        "--label",
        "B",
        "-o",
        "c",
        "--resamples",
        "20",
    ];
    let o = cli::cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr.contains(
            "warning: A and B are the same catalogue (a.csv), so they are not independent samples"
        ),
        "{}",
        o.stderr
    );
    let t = rows(&d.path().join("c/tests.csv"));
    assert_eq!(
        (cell(&t[0], "ks_mass_d"), cell(&t[0], "ks_mass_p")),
        (0.0, 1.0)
    );
    let o = cli::cairn(
        &[
            "compare",
            "a.csv",
            "copy.csv",
            "-o",
            "d",
            "--resamples",
            "20",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr
            .contains("warning: a and copy hold the same leaves (the same masses and radii)"),
        "{}",
        o.stderr
    );
    let report = std::fs::read_to_string(d.path().join("d/report.md")).unwrap();
    assert!(report.contains("are not independent samples"), "{report}");
}

/// A `--mass-min` well below a population's lightest leaf (more than cairn's factor 1.5) is
/// warned about for that population alone, naming its lightest leaf and the fix; one just
/// under the lightest leaf, and a population reaching below it, are not.
#[test]
fn a_mass_min_below_every_leaf_is_warned_about() {
    let d = tempfile::tempdir().unwrap();
    catalogue(
        &d.path().join("light.csv"),
        &power_law_leaves(60, 0.2, 2.35),
    );
    catalogue(
        &d.path().join("heavy.csv"),
        &power_law_leaves(60, 1.0, 2.35),
    );
    let go = |mass_min: &str, out: &str| {
        let (code, _, err) = run(
            d.path(),
            &[
                "compare",
                "light.csv",
                "heavy.csv",
                "-o",
                out,
                "--mass-min",
                mass_min,
                "--resamples",
                "20",
                "-q",
            ],
        );
        assert_eq!(code, 0, "{err}");
        err
    };
    let err = go("0.3Msun", "a");
    assert!(
        err.contains("warning: heavy: --mass-min 0.3 Msun lies well below its lightest leaf")
            && err.contains("leave --mass-min out"),
        "{err}"
    );
    assert!(!err.contains("light: --mass-min"), "{err}");
    let report = std::fs::read_to_string(d.path().join("a/report.md")).unwrap();
    assert!(
        report.contains("heavy: --mass-min 0.3 Msun lies well below"),
        "{report}"
    );
    let err = go("0.9Msun", "b");
    assert!(!err.contains("lies well below"), "{err}");
}

/// A run and one made with its `--thresholds-from` record their thresholds in other words
/// (`default` against a value in map units) but used them at the same values to the bit:
/// compare does not call them different; a run at another floor still is.
#[test]
fn thresholds_taken_from_a_run_compare_as_the_same() {
    let d = tempfile::tempdir().unwrap();
    let map =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let m = map.to_str().unwrap();
    let physics = [
        "--distance",
        "410pc",
        "--temperature",
        "14K",
        "--no-figure",
        "-q",
    ];
    for (out, extra) in [
        ("science", &[][..]),
        ("again", &["--thresholds-from", "science"][..]),
        (
            "higher",
            &["--thresholds-from", "science", "--floor", "5e21cm-2"][..],
        ),
    ] {
        let mut args = vec!["segment", m, "-o", out];
        args.extend_from_slice(&physics);
        args.extend_from_slice(extra);
        let (code, _, err) = run(d.path(), &args);
        assert_eq!(code, 0, "{out}: {err}");
    }
    let compare = |b: &str, out: &str| {
        let (code, _, err) = run(
            d.path(),
            &[
                "compare",
                "science",
                b,
                "-o",
                out,
                "--resamples",
                "20",
                "-q",
            ],
        );
        assert_eq!(code, 0, "{err}");
        err
    };
    let err = compare("again", "c1");
    assert!(!err.contains("(as given) differs"), "{err}");
    let err = compare("higher", "c2");
    assert!(err.contains("the floor (as given) differs"), "{err}");
    assert!(!err.contains("the prominence (as given) differs"), "{err}");
}

/// Hand-made catalogues are read as spreadsheet programs write them: with a byte-order mark,
/// spaces after the separators, tabs or semicolons between the columns. Each gives the same
/// populations table as the plain comma-separated file it was made from.
#[test]
fn hand_made_catalogues_in_spreadsheet_dialects_are_read() {
    let d = tempfile::tempdir().unwrap();
    catalogue(&d.path().join("plain.csv"), &power_law_leaves(40, 0.5, 2.2));
    catalogue(&d.path().join("b.csv"), &power_law_leaves(30, 0.5, 2.0));
    let plain = std::fs::read_to_string(d.path().join("plain.csv")).unwrap();
    let dialects: [(&str, String); 4] = [
        ("bom", format!("\u{feff}{plain}")),
        ("spaced", plain.replace(',', ", ")),
        ("tabbed", plain.replace(',', "\t")),
        ("semicolons", plain.replace("\n", "\r\n").replace(',', ";")),
    ];
    let populations = |out: &str| {
        let p = rows(&d.path().join(out).join("populations.csv"));
        ["n", "median_mass", "mass_size_slope", "alpha"].map(|k| cell(&p[0], k))
    };
    let args = [
        "compare",
        "plain.csv",
        "b.csv",
        "-o",
        "cmp_plain",
        "--resamples",
        "20",
    ];
    let o = cli::cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let want = populations("cmp_plain");
    assert_eq!(want[0], 40.0);
    for (name, text) in dialects {
        let file = format!("{name}.csv");
        std::fs::write(d.path().join(&file), text).unwrap();
        let out = format!("cmp_{name}");
        let args = ["compare", &file, "b.csv", "-o", &out, "--resamples", "20"];
        let o = cli::cairn(&args, d.path());
        assert_eq!(o.code, 0, "{name}: {}", o.stderr);
        let got = populations(&out);
        for (g, w) in got.iter().zip(want) {
            assert!(
                g == &w || (g.is_nan() && w.is_nan()),
                "{name}: {got:?} {want:?}"
            );
        }
    }
}

/// A catalogue without the columns compare needs is refused naming exactly the missing ones
/// and the header as read; a truth table of cairn synth given as a population is told to go
/// with --truth; a number with a decimal comma is named as such. Nothing is written.
#[test]
fn missing_columns_are_named_and_a_truth_table_is_sent_to_truth() {
    let d = tempfile::tempdir().unwrap();
    catalogue(&d.path().join("b.csv"), &power_law_leaves(30, 0.5, 2.0));
    std::fs::write(
        d.path().join("nokind.csv"),
        "mass_excess,radius_pc\n1.0,0.02\n2.0,0.03\n3.0,0.04\n",
    )
    .unwrap();
    let args = ["compare", "nokind.csv", "b.csv", "-o", "c"];
    let o = cli::cairn(&args, d.path());
    cli::check_refused(&o, &args, "nokind.csv", "lacks the column 'kind'");
    assert!(
        o.stderr
            .contains("its header reads: mass_excess, radius_pc")
            && o.stderr.contains("leaf for each core")
            && !o.stderr.contains("'radius_pc'"),
        "{}",
        o.stderr
    );
    std::fs::write(
        d.path().join("renamed.csv"),
        "kind;mass;radius\nleaf;1.0;0.02\n",
    )
    .unwrap();
    let args = ["compare", "renamed.csv", "b.csv", "-o", "c"];
    let o = cli::cairn(&args, d.path());
    cli::check_refused(
        &o,
        &args,
        "renamed.csv",
        "lacks the columns 'mass_excess' and 'radius_pc' (its header reads: kind, mass, radius)",
    );
    std::fs::write(
        d.path().join("comma.csv"),
        "kind;mass_excess;radius_pc\nleaf;0,5;0.02\nleaf;1.5;0.03\nleaf;2.5;0.04\n",
    )
    .unwrap();
    let args = ["compare", "comma.csv", "b.csv", "-o", "c"];
    let o = cli::cairn(&args, d.path());
    cli::check_refused(&o, &args, "comma.csv", "'0,5'");
    assert!(o.stderr.contains("decimal point"), "{}", o.stderr);
    // A truth table that cairn synth writes.
    let o = cli::cairn(
        &[
            "synth", "-o", "s", "--size", "64", "--cores", "3", "--seed", "1", "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let args = ["compare", "b.csv", "s/synth-truth.csv", "-o", "c"];
    let o = cli::cairn(&args, d.path());
    cli::check_refused(&o, &args, "synth-truth.csv", "is a truth table");
    assert!(o.stderr.contains("--truth"), "{}", o.stderr);
    assert!(!d.path().join("c").exists());
}

/// A steep tail (alpha 2.8, under the default search window's top of 3) has many bootstrap
/// resamples that a search up to alpha 10 would have fitted steeper: the report, the summary
/// and populations.csv say that its bootstrap uncertainty is then a lower bound and to rerun
/// with a larger --alpha-max; a shallow tail (alpha 2.3 on 200 leaves) gets no such note.
#[test]
fn a_bootstrap_held_back_by_the_search_window_is_said_to_be_a_lower_bound() {
    let d = tempfile::tempdir().unwrap();
    catalogue(&d.path().join("steep.csv"), &power_law_leaves(60, 0.5, 2.8));
    catalogue(
        &d.path().join("shallow.csv"),
        &power_law_leaves(200, 0.5, 2.3),
    );
    let args = [
        "compare",
        "steep.csv",
        "shallow.csv",
        "-o",
        "held",
        "--resamples",
        "200",
    ];
    let o = cli::cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let note = "the top of the search window, had it reached alpha 10, and took another lower mass inside it instead";
    let report = std::fs::read_to_string(d.path().join("held/report.md")).unwrap();
    let said = |text: &str, label: &str| {
        text.lines().any(|l| {
            l.contains(note)
                && l.contains("is a lower bound")
                && l.contains("rerun with a larger --alpha-max")
                && l.trim_start().starts_with(&format!("{label}: "))
        })
    };
    assert!(said(&report, "steep"), "{report}");
    assert!(!said(&report, "shallow"), "{report}");
    assert!(o.stdout.contains(note), "{}", o.stdout);
    let rows = rows(&d.path().join("held/populations.csv"));
    let limited = |label: &str| {
        let row = rows.iter().find(|r| r["population"] == label).unwrap();
        cell(row, "tail_boot_window_limited")
    };
    assert!(limited("steep") >= 10.0, "{}", limited("steep"));
    assert!(limited("shallow") < 10.0, "{}", limited("shallow"));
    // The share in the note is the column's.
    assert!(
        report.contains(&format!(
            "{} of 200 bootstrap resamples ({:.0}%)",
            limited("steep"),
            limited("steep") / 2.0
        )),
        "{report}"
    );
}

/// The report's section on mass functions cautions that the tail fits and the tests assume
/// each catalogue complete above the masses they use, names the tails' lower masses, and says
/// how to measure the limit and how to compare above it; populations.csv carries the caution.
#[test]
fn the_report_cautions_that_the_fits_assume_completeness() {
    let d = tempfile::tempdir().unwrap();
    catalogue(&d.path().join("a.csv"), &power_law_leaves(60, 0.5, 2.3));
    catalogue(&d.path().join("b.csv"), &power_law_leaves(80, 0.4, 2.0));
    let args = ["compare", "a.csv", "b.csv", "-o", "c", "--resamples", "20"];
    let o = cli::cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let report = std::fs::read_to_string(d.path().join("c/report.md")).unwrap();
    let section = report
        .split("## Mass functions")
        .nth(1)
        .and_then(|r| r.split("## Mass-size").next())
        .unwrap();
    assert!(
        section.contains("**Completeness.**")
            && section.contains("`cairn synth --into MAP`, then `cairn compare RUN --truth TRUTH`")
            && section.contains("`--tests-above`")
            && section.contains("`--mass-min` at or above the largest of the limits"),
        "{section}"
    );
    // The lower masses named are the tails' own.
    for row in rows(&d.path().join("c/populations.csv")) {
        let said = format!("{} {:.3} Msun", row["population"], cell(&row, "mass_min"));
        assert!(section.contains(&said), "{said}: {section}");
    }
    let table = std::fs::read_to_string(d.path().join("c/populations.csv")).unwrap();
    assert!(
        table.contains("# note: caution: the tail fits and the tests assume each catalogue complete above the masses they use"),
        "{table}"
    );
}

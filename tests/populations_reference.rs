//! Checks cairn's populations module against outside references stored in
//! `fixtures/populations/`, written by `tests/oracle/populations_reference.py` from seeded
//! numpy 2.4.6 samples, and one statistical self-consistency test (coverage of the power-law
//! error), which is not an outside reference.

mod common;

use cairn::populations::{
    self, Bootstrap, KsMethod, XminSearch, anderson_ksamp, fit_lognormal, fit_mass_size,
    fit_power_law, ks_2samp, scan_xmin,
};
use common::{assert_close, fixture_json, num, nums};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

const POWER_LAW_CASES: [&str; 7] = [
    "a2.35_n50",
    "a2.35_n200",
    "a2.35_n2000",
    "a1.8_n50",
    "a1.8_n200",
    "a1.8_n2000",
    "broken",
];

#[test]
fn power_law_fit_matches_powerlaw_package() {
    // Source: powerlaw 2.0.0 (Alstott, Bullmore & Plenz 2014), Fit(data, discrete=False):
    // Clauset, Shalizi & Newman 2009 continuous MLE with the KS search for x_min.
    for case in POWER_LAW_CASES {
        let f = fixture_json(&format!("populations/powerlaw_{case}.json"));
        let data = nums(&f["data"]);
        let reference = &f["fit"];
        let fit = fit_power_law(&data, None, &XminSearch::default()).unwrap();
        assert_eq!(
            fit.xmin,
            num(&reference["xmin"]),
            "{case}: x_min (powerlaw 2.0.0)"
        );
        assert_eq!(fit.n_tail as u64, reference["n_tail"].as_u64().unwrap());
        assert_close(
            fit.alpha,
            num(&reference["alpha"]),
            1e-10,
            0.0,
            &format!("{case}: alpha (powerlaw 2.0.0)"),
        );
        assert_close(
            fit.alpha_error,
            num(&reference["sigma"]),
            1e-10,
            0.0,
            &format!("{case}: sigma (powerlaw 2.0.0)"),
        );
        assert_close(
            fit.ks_distance,
            num(&reference["D"]),
            1e-10,
            0.0,
            &format!("{case}: D (powerlaw 2.0.0)"),
        );
    }
}

#[test]
fn power_law_with_given_xmin_matches_powerlaw_package() {
    // Source: powerlaw 2.0.0, Fit(data, xmin=given).power_law (alpha, standard_err, D).
    for case in POWER_LAW_CASES {
        let f = fixture_json(&format!("populations/powerlaw_{case}.json"));
        let data = nums(&f["data"]);
        let reference = &f["given_xmin"];
        let xmin = num(&reference["xmin"]);
        let fit = fit_power_law(&data, Some(xmin), &XminSearch::default()).unwrap();
        assert!(!fit.xmin_fitted);
        assert_eq!(fit.n_tail as u64, reference["n_tail"].as_u64().unwrap());
        for (ours, key) in [
            (fit.alpha, "alpha"),
            (fit.alpha_error, "sigma"),
            (fit.ks_distance, "D"),
        ] {
            assert_close(
                ours,
                num(&reference[key]),
                1e-10,
                0.0,
                &format!("{case}: given x_min {key} (powerlaw 2.0.0)"),
            );
        }
    }
}

#[test]
fn every_candidate_xmin_matches_powerlaw_scan() {
    // Source: powerlaw 2.0.0 Fit.xmin_fitting_results (xmins, alphas, distances, valid_fits).
    // Every candidate x_min is compared with powerlaw's, and every candidate's admissibility
    // (cairn: closed-form alpha strictly inside (1, 3); see src/populations/powerlaw.rs) with
    // powerlaw's valid_fits (alpha strictly inside its default range (0, 3), and for a
    // numerically optimised alpha also a successful optimisation not within 0.01 of a bound).
    // alpha and D are compared only where powerlaw keeps the closed form, 1.5 < alpha <= 3
    // (powerlaw 2.0.0 Power_Law.fit). Outside it powerlaw optimises alpha numerically inside
    // [0, 3]; those candidates are compared for admissibility alone: alpha <= 1.5 (the closed
    // form of a continuous law is always above 1, so cairn admits them; powerlaw's optimum
    // lies near the closed form and is valid too) and alpha > 3 (cairn rejects them; powerlaw's
    // optimum stops at the bound 3, which it flags as invalid). Each of the three kinds occurs
    // in the stored scans, which is asserted below.
    let (mut closed_form, mut below, mut above) = (0, 0, 0);
    for case in ["a2.35_n50", "a2.35_n200", "a1.8_n50", "a1.8_n200"] {
        let f = fixture_json(&format!("populations/powerlaw_{case}.json"));
        let data = nums(&f["data"]);
        let scan = &f["scan"];
        let ours = scan_xmin(&data, &XminSearch::default()).unwrap();
        let xmins = nums(&scan["xmins"]);
        let alphas = nums(&scan["alphas"]);
        let distances = nums(&scan["distances"]);
        let valid: Vec<bool> = scan["valid"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_bool().unwrap())
            .collect();
        assert_eq!(ours.len(), xmins.len(), "{case}: number of candidates");
        assert_eq!(valid.len(), xmins.len(), "{case}: number of valid flags");
        for (i, c) in ours.iter().enumerate() {
            assert_eq!(c.xmin, xmins[i], "{case}: candidate {i}");
            assert_eq!(
                c.admissible, valid[i],
                "{case}: admissible {i} (alpha {})",
                c.alpha
            );
            if c.alpha > 1.5 && c.alpha <= 3.0 {
                assert_close(
                    c.alpha,
                    alphas[i],
                    1e-10,
                    0.0,
                    &format!("{case}: alpha {i}"),
                );
                assert_close(
                    c.ks_distance,
                    distances[i],
                    1e-10,
                    0.0,
                    &format!("{case}: D {i}"),
                );
                closed_form += 1;
            } else if c.alpha <= 1.5 {
                below += 1;
            } else {
                above += 1;
            }
        }
    }
    eprintln!(
        "candidates: {closed_form} closed form, {below} with alpha <= 1.5, {above} with alpha > 3"
    );
    assert!(
        closed_form > 200,
        "only {closed_form} candidates compared in full"
    );
    assert!(below > 0, "no candidate with alpha <= 1.5 in the scans");
    assert!(above > 0, "no candidate with alpha > 3 in the scans");
}

#[test]
fn ks_two_sample_matches_scipy() {
    // Source: scipy 1.17.1 stats.ks_2samp, methods 'auto', 'exact' and 'asymp'.
    let f = fixture_json("populations/ks_2samp.json");
    let pairs = f["pairs"].as_object().unwrap();
    assert!(pairs.len() >= 9);
    for (name, pair) in pairs {
        let (x, y) = (nums(&pair["x"]), nums(&pair["y"]));
        for (key, method) in [
            ("auto", KsMethod::Auto),
            ("exact", KsMethod::Exact),
            ("asymp", KsMethod::Asymptotic),
        ] {
            let r = ks_2samp(&x, &y, method).unwrap();
            let reference = &pair[key];
            let expected_method = if key == "asymp" {
                KsMethod::Asymptotic
            } else {
                KsMethod::Exact
            };
            assert_eq!(r.method, expected_method, "{name} {key}: method used");
            assert_close(
                r.statistic,
                num(&reference["statistic"]),
                1e-10,
                0.0,
                &format!("{name} {key}: D (scipy 1.17.1)"),
            );
            // Exact and asymptotic p-values alike to 1e-10 (measured: within 4e-14; the
            // asymptotic ones use the Durbin matrix where scipy uses Pomeranz's recursion,
            // both exact algorithms for the Kolmogorov distribution).
            let tol = 1e-10;
            assert_close(
                r.pvalue,
                num(&reference["pvalue"]),
                tol,
                0.0,
                &format!("{name} {key}: p-value (scipy 1.17.1)"),
            );
        }
    }
}

#[test]
fn anderson_darling_matches_scipy() {
    // Source: scipy 1.17.1 stats.anderson_ksamp(samples, variant='midrank')
    // (Scholz & Stephens 1987), statistic and the capped, interpolated p-value.
    let f = fixture_json("populations/anderson_ksamp.json");
    let sets = f["sets"].as_object().unwrap();
    let mut interpolated = 0;
    for (name, set) in sets {
        let samples: Vec<Vec<f64>> = set["samples"]
            .as_array()
            .unwrap()
            .iter()
            .map(nums)
            .collect();
        let refs: Vec<&[f64]> = samples.iter().map(|s| s.as_slice()).collect();
        let r = anderson_ksamp(&refs).unwrap();
        assert_close(
            r.statistic,
            num(&set["statistic"]),
            1e-10,
            0.0,
            &format!("{name}: statistic (scipy 1.17.1)"),
        );
        assert_eq!(
            r.pvalue_capped,
            set["capped"].as_bool().unwrap(),
            "{name}: capped"
        );
        if r.pvalue_capped {
            assert_eq!(r.pvalue, num(&set["pvalue"]), "{name}: capped p-value");
        } else {
            interpolated += 1;
            assert_close(
                r.pvalue,
                num(&set["pvalue"]),
                1e-10,
                0.0,
                &format!("{name}: p-value (scipy 1.17.1)"),
            );
        }
    }
    assert!(interpolated >= 2, "too few interpolated p-values checked");
}

#[test]
fn lognormal_fit_matches_scipy() {
    // Source: scipy 1.17.1 stats.lognorm.fit(data, floc=0): shape = sigma, scale = exp(mu).
    let f = fixture_json("populations/lognormal.json");
    for (name, s) in f["samples"].as_object().unwrap() {
        let fit = fit_lognormal(&nums(&s["data"])).unwrap();
        assert_eq!(num(&s["loc"]), 0.0);
        assert_close(
            fit.sigma,
            num(&s["shape"]),
            1e-10,
            0.0,
            &format!("{name}: shape"),
        );
        assert_close(
            fit.peak_mass(),
            num(&s["scale"]),
            1e-10,
            0.0,
            &format!("{name}: scale"),
        );
        // The exact 68.27% intervals of mu and sigma (scipy 1.17.1 stats.t.interval and
        // stats.chi2.ppf). Tolerance 1e-9 relative to the interval's width: the quantiles of
        // statrs 0.19.1 agree with scipy's to about 2e-10 (the chi-square quantiles for few
        // degrees of freedom) and better elsewhere.
        assert_eq!(
            num(&f["level"]),
            cairn::populations::lognormal::INTERVAL_LEVEL,
            "level"
        );
        for (key, ours) in [
            ("mu_interval", fit.mu_interval),
            ("sigma_interval", fit.sigma_interval),
        ] {
            let r = nums(&s[key]);
            let width = r[1] - r[0];
            assert!(width > 0.0, "{name}: {key}");
            assert_close(
                ours.0,
                r[0],
                0.0,
                1e-9 * width,
                &format!("{name}: {key} low"),
            );
            assert_close(
                ours.1,
                r[1],
                0.0,
                1e-9 * width,
                &format!("{name}: {key} high"),
            );
        }
        let (lo, hi) = fit.peak_mass_interval();
        assert!(lo < fit.peak_mass() && fit.peak_mass() < hi, "{name}");
        let (lo, hi) = fit.sigma_interval;
        assert!(
            lo < fit.sigma && fit.sigma < hi,
            "{name}: sigma inside its interval"
        );
    }
    // Small samples, where the exact intervals matter, are among the cases (three masses: the
    // fewest that get intervals).
    assert!(f["samples"]["n3"].is_object() && f["samples"]["n5"].is_object());
}

#[test]
fn mass_size_fit_matches_scipy_linregress() {
    // Source: scipy 1.17.1 stats.linregress(log10 R, log10 M).
    let f = fixture_json("populations/mass_size.json");
    let mut fits = Vec::new();
    for (name, p) in f["populations"].as_object().unwrap() {
        let fit = fit_mass_size(&nums(&p["radius"]), &nums(&p["mass"])).unwrap();
        for (ours, key) in [
            (fit.slope, "slope"),
            (fit.intercept, "intercept"),
            (fit.slope_error, "stderr"),
            (fit.intercept_error, "intercept_stderr"),
            (fit.r, "rvalue"),
        ] {
            assert_close(
                ours,
                num(&p[key]),
                1e-10,
                0.0,
                &format!("{name}: {key} (scipy 1.17.1)"),
            );
        }
        fits.push((fit, num(&p["slope"]), num(&p["stderr"])));
    }
    // Slope difference from the reference slopes and errors: sqrt(s1^2 + s2^2).
    let (a, b) = (&fits[0], &fits[1]);
    let d =
        populations::slope_difference((a.0.slope, a.0.slope_error), (b.0.slope, b.0.slope_error))
            .unwrap();
    let expected = (a.1 - b.1).abs() / (a.2 * a.2 + b.2 * b.2).sqrt();
    assert_close(
        d.significance,
        expected,
        1e-9,
        0.0,
        "slope difference in sigma",
    );
}

/// Draws n values from dN/dM ~ M^-alpha above xmin by inversion.
fn draw_power_law(rng: &mut ChaCha8Rng, alpha: f64, xmin: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|_| {
            let u: f64 = rng.random();
            xmin * (1.0 - u).powf(-1.0 / (alpha - 1.0))
        })
        .collect()
}

#[test]
fn power_law_error_covers_the_truth_at_the_nominal_rate() {
    // Statistical self-consistency, not an outside reference. 1000 seeded samples of n = 100
    // from alpha = 2.3 above x_min = 1 (x_min given). The fraction with |alpha_hat - 2.3| <=
    // (alpha_hat - 1)/sqrt(n) should be 68.3%; the binomial standard deviation for 1000 trials
    // is sqrt(0.683 * 0.317 / 1000) = 1.5%, so 68% +/- 4% is about +/- 2.7 sigma. (The MLE is
    // biased high by a factor n/(n-1) at finite n, which moves the rate by well under 1%.)
    let (alpha, n, trials) = (2.3, 100, 1000);
    let search = XminSearch::default();
    let mut hits = 0;
    let mut kept = Vec::new();
    for t in 0..trials {
        let mut rng = ChaCha8Rng::seed_from_u64(20_000 + t as u64);
        let data = draw_power_law(&mut rng, alpha, 1.0, n);
        let fit = fit_power_law(&data, Some(1.0), &search).unwrap();
        if (fit.alpha - alpha).abs() <= fit.alpha_error {
            hits += 1;
        }
        if t < 100 {
            kept.push(data);
        }
    }
    let rate = hits as f64 / trials as f64;
    eprintln!("analytic 1-sigma coverage: {rate:.3}");
    assert!(
        (rate - 0.683).abs() <= 0.04,
        "analytic error covers the truth in {rate:.3} of trials, expected 0.683 +/- 0.04"
    );

    // Bootstrap errors on 100 of the samples (200 resamples each): with 100 trials the
    // binomial standard deviation is 4.7%, so the band is widened to +/- 0.14 (3 sigma).
    let mut boot_hits = 0;
    for (t, data) in kept.iter().enumerate() {
        let fit = fit_power_law(data, Some(1.0), &search).unwrap();
        let b = populations::bootstrap_power_law(
            data,
            Some(1.0),
            &search,
            &Bootstrap {
                resamples: 200,
                seed: 7 + t as u64,
            },
        )
        .unwrap();
        assert_eq!(b.n_failed, 0);
        if (fit.alpha - alpha).abs() <= b.alpha_std {
            boot_hits += 1;
        }
    }
    let boot_rate = boot_hits as f64 / kept.len() as f64;
    eprintln!("bootstrap 1-sigma coverage: {boot_rate:.2}");
    assert!(
        (boot_rate - 0.683).abs() <= 0.14,
        "bootstrap error covers the truth in {boot_rate:.2} of trials, expected 0.683 +/- 0.14"
    );
}

/// Medians and percentiles (compare's medians, the bootstrap's 16/50/84 percentiles) against
/// numpy 2.4.6's `percentile` with its default linear method (Hyndman & Fan 1996, definition
/// 7), on samples of 1 to 1000 values, one with ties, and two of 30,000 values nearly or
/// exactly all equal (fixtures/populations/percentiles.json). cairn computes the virtual index
/// and the interpolation as numpy writes them, so the values agree to the bit.
#[test]
fn percentiles_match_numpy() {
    let f = fixture_json("populations/percentiles.json");
    let qs = nums(&f["q"]);
    let samples = f["samples"].as_object().unwrap();
    assert!(samples.len() >= 7);
    let repeated = f["repeated"].as_object().unwrap();
    assert_eq!(repeated.len(), 2);
    let expanded = repeated.iter().map(|(name, r)| {
        let counts = r["counts"].as_array().unwrap();
        let data: Vec<f64> = nums(&r["values"])
            .into_iter()
            .zip(counts)
            .flat_map(|(v, c)| std::iter::repeat_n(v, c.as_u64().unwrap() as usize))
            .collect();
        assert_eq!(data.len(), 30_000, "{name}");
        (name, data, &r["percentiles"])
    });
    let listed = samples
        .iter()
        .map(|(name, s)| (name, nums(&s["data"]), &s["percentiles"]));
    for (name, data, want) in listed.chain(expanded) {
        let got = cairn::populations::percentiles(&data, &qs).unwrap();
        for ((q, g), want) in qs.iter().zip(&got).zip(nums(want)) {
            assert_eq!(
                g.to_bits(),
                want.to_bits(),
                "{name}: percentile {q}: cairn {g:e}, numpy {want:e}"
            );
        }
        let median = cairn::populations::median(&data).unwrap();
        assert_eq!(
            median,
            got[qs.iter().position(|&q| q == 50.0).unwrap()],
            "{name}"
        );
    }
}

/// The tail's power law against a log-normal truncated at the same lower mass and fitted to the
/// same masses (Clauset, Shalizi & Newman 2009 section 5; Vuong 1989), against
/// fixtures/populations/tail_vs_lognormal.json: powerlaw 2.0.0
/// `Fit(data, xmin=given).distribution_compare('power_law', 'lognormal')` with and without
/// `normalized_ratio=True`, its `fit.lognormal` (mu, sigma, loglikelihood, noise_flag), and
/// scipy 1.17.1 `special.log_ndtr` re-evaluating that log-normal's log-likelihood in logarithms.
///
/// Tolerances. The power law is the same closed form on the same masses: alpha and its
/// log-likelihood to 1e-12 relative (measured 1e-15). powerlaw fits the log-normal by
/// Nelder-Mead with tol=1e-4 (scipy's xatol and fatol: the simplex spans at most 1e-4 in mu and
/// sigma and in -ln L when it stops), so its maximum can lie up to about 1e-4 below the true
/// one, and cairn's (Newton's method to a decrement of 1e-14 per mass on the concave
/// likelihood) must be at least as high, less a rounding allowance of 1e-9 on sums of up to
/// 2000 terms, and higher by at most that 1e-4 (measured: up to 2.1e-7 higher). R then agrees
/// to 1e-4 absolute too. The parameters agree to 1e-3 of sigma, the scale of both (measured:
/// up to 1e-4; near the power-law limit mu and sigma trade along a flat ridge of the
/// likelihood, where a small rise of ln L moves them far). The normalised ratio agrees to 1e-3
/// relative (measured 5e-5), and the p-value, erfc(|R_norm|/sqrt 2), to 5e-3 relative: its
/// relative change is about |R_norm| + 1/|R_norm| times the change of R_norm (measured 1e-3 at
/// p = 1e-5).
///
/// Where powerlaw's fit carries `noise_flag` (its optimiser failed or left the range), cairn
/// must find the likelihood's supremum at the power-law limit (the best log-normal is the power
/// law itself, R = 0, no normalised ratio or p-value): the package flags exactly the cases that
/// cairn finds at the limit, and there the log-likelihood at powerlaw's mu and sigma, evaluated
/// in logarithms by scipy, lies below the power law's, as the limit requires. (powerlaw's own
/// value there is computed from two subnormal numbers and is not used.)
#[test]
fn tail_against_lognormal_matches_powerlaw_package() {
    let f = fixture_json("populations/tail_vs_lognormal.json");
    let cases = f["cases"].as_object().unwrap();
    let (mut at_limit, mut favoured, mut undecided) = (0, 0, 0);
    for (name, c) in cases {
        let data = nums(&c["data"]);
        let xmin = num(&c["xmin"]);
        let r = populations::power_law_vs_lognormal(&data, xmin).unwrap();
        let ln = &c["lognormal"];
        let what = |key: &str| format!("{name}: {key} (powerlaw 2.0.0)");
        assert_eq!(r.n as u64, c["n_tail"].as_u64().unwrap(), "{name}: n");
        assert_close(r.alpha, num(&c["alpha"]), 1e-12, 0.0, &what("alpha"));
        assert_close(
            r.log_likelihood_power_law,
            num(&c["loglikelihood_power_law"]),
            1e-12,
            0.0,
            &what("power law ln L"),
        );
        let flagged = ln["noise_flag"].as_bool().unwrap();
        assert_eq!(
            r.lognormal.at_power_law_limit, flagged,
            "{name}: at the power-law limit exactly where powerlaw's fit is flagged"
        );
        if flagged {
            at_limit += 1;
            assert_eq!(r.ratio, 0.0, "{name}: R at the limit");
            assert!(r.normalized_ratio.is_nan() && r.p_value.is_nan(), "{name}");
            assert_close(
                r.lognormal.log_likelihood,
                r.log_likelihood_power_law,
                1e-12,
                0.0,
                &format!("{name}: the limit's ln L is the power law's"),
            );
            let at_package = num(&ln["loglikelihood_log_ndtr"]);
            assert!(
                at_package <= r.lognormal.log_likelihood + 1e-9,
                "{name}: powerlaw's log-normal ({at_package}, scipy log_ndtr) beats the power-law limit ({})",
                r.lognormal.log_likelihood
            );
            continue;
        }
        // The package's value and scipy's re-evaluation in logarithms agree here.
        let package = num(&ln["loglikelihood"]);
        assert_close(
            num(&ln["loglikelihood_log_ndtr"]),
            package,
            1e-12,
            0.0,
            &format!("{name}: powerlaw's ln L against scipy's log_ndtr at its mu and sigma"),
        );
        let rise = r.lognormal.log_likelihood - package;
        eprintln!("{name}: cairn's log-normal ln L is {rise:.3e} above powerlaw's");
        assert!(
            (-1e-9..=1e-4).contains(&rise),
            "{name}: cairn's maximum ln L {} against powerlaw's {package}",
            r.lognormal.log_likelihood
        );
        assert_close(r.ratio, num(&c["R"]), 0.0, 1e-4, &what("R"));
        let sigma = num(&ln["sigma"]);
        assert_close(
            r.lognormal.mu,
            num(&ln["mu"]),
            0.0,
            1e-3 * sigma,
            &what("mu"),
        );
        assert_close(r.lognormal.sigma, sigma, 1e-3, 0.0, &what("sigma"));
        assert_close(
            r.normalized_ratio,
            num(&c["R_normalized"]),
            1e-3,
            0.0,
            &what("normalised R"),
        );
        assert_close(r.p_value, num(&c["p"]), 5e-3, 0.0, &what("p"));
        // A small p favours the sign of R: here always the log-normal, since the power law is
        // a limit of the truncated log-normals and R cannot be positive.
        assert!(r.ratio <= 0.0, "{name}: R = {}", r.ratio);
        match r.verdict(0.1) {
            populations::Verdict::LogNormalFavoured => favoured += 1,
            populations::Verdict::NotDistinguished => undecided += 1,
            populations::Verdict::PowerLawFavoured => panic!("{name}: power law favoured"),
        }
    }
    // Every kind of outcome is among the cases.
    assert!(
        at_limit >= 1 && favoured >= 2 && undecided >= 4,
        "{at_limit} {favoured} {undecided}"
    );
}

/// The paired bootstrap of the mass-size slope on a large invented population with Gaussian
/// scatter of constant width (fixtures/populations/mass_size_bootstrap.json, 3000 pairs)
/// agrees with scipy 1.17.1 linregress's textbook standard error of the slope.
///
/// Tolerance. Resampling pairs estimates the variance sum (x_i - mean x)^2 e_i^2 /
/// (sum (x_i - mean x)^2)^2 (the heteroscedasticity-consistent form; Efron & Tibshirani 1993,
/// chapter 9, from memory), and linregress s^2 / sum (x_i - mean x)^2. With Gaussian errors
/// (Var e^2 = 2 sigma^4) their ratio is 1 + (1/n) sum (w_i - 1) e_i^2 / sigma^2, w_i = (x_i -
/// mean x)^2 / var x, whose standard deviation is sqrt(2 (k - 1) / n), k the kurtosis of x
/// (1.8 for the uniform x here): so the standard deviations differ by sqrt(2 (k - 1) / n) / 2
/// relative (derived here; about 1.2%). B resamples add the Monte Carlo error of a standard
/// deviation, 1 / sqrt(2 (B - 1)) relative (normal theory; 1.1% at B = 4000). The check allows
/// four times their quadrature sum (about 6.4%). The half-width of the 68.27% percentile
/// interval is held to the same standard error with the sampling variance of the two sample
/// quantiles instead, p (1 - p) / (B f^2) each with covariance p^2 / (B f^2) (p = 0.1587, f =
/// phi(1) the normal density there; the asymptotic variance of sample quantiles, common
/// practice): 0.924 / B in units of the standard deviation squared.
#[test]
fn mass_size_bootstrap_agrees_with_scipy_stderr_on_a_large_sample() {
    let f = fixture_json("populations/mass_size_bootstrap.json");
    let (radius, mass) = (nums(&f["radius"]), nums(&f["mass"]));
    let stderr = num(&f["stderr"]);
    let b = 4000;
    let boot = populations::bootstrap_mass_size(
        &radius,
        &mass,
        &Bootstrap {
            resamples: b,
            seed: 1,
        },
    )
    .unwrap();
    assert_eq!((boot.slopes.len(), boot.n_failed), (b, 0));
    let n = radius.len() as f64;
    let x: Vec<f64> = radius.iter().map(|r| r.log10()).collect();
    let mean = x.iter().sum::<f64>() / n;
    let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n;
    let kurtosis = x.iter().map(|v| (v - mean).powi(4)).sum::<f64>() / n / (var * var);
    let hc = (2.0 * (kurtosis - 1.0) / n).sqrt() / 2.0;
    let mc = 1.0 / (2.0 * (b as f64 - 1.0)).sqrt();
    let tol = 4.0 * hc.hypot(mc);
    let ratio = boot.slope_std / stderr;
    eprintln!(
        "bootstrap sd / linregress stderr = {ratio:.4} (tolerance {tol:.4}; kurtosis of x {kurtosis:.3})"
    );
    assert!(
        (ratio - 1.0).abs() <= tol,
        "bootstrap sd {} against scipy 1.17.1 linregress stderr {stderr}",
        boot.slope_std
    );
    let (lo, hi) = boot.slope_interval;
    let half = (hi - lo) / 2.0;
    let tol_half = 4.0 * hc.hypot((0.924 / b as f64).sqrt());
    eprintln!(
        "interval half-width / stderr = {:.4} (tolerance {tol_half:.4})",
        half / stderr
    );
    assert!((half / stderr - 1.0).abs() <= tol_half, "half-width {half}");
    // The interval lies about the fitted slope (scipy's).
    let slope = num(&f["slope"]);
    assert!(lo < slope && slope < hi, "{lo} {slope} {hi}");
}

/// The goodness of fit of the power-law tail (Clauset, Shalizi & Newman 2009, section 4.1)
/// against the same semi-parametric bootstrap run with powerlaw 2.0.0's own fits
/// (`populations/powerlaw_gof.json`, 400 synthetic sets each). Both p-values are Monte Carlo
/// estimates from different random numbers, so they must agree within the binomial spread of
/// the two: four standard deviations of their difference, sqrt(p (1 - p) (1/400 + 1/B)). The
/// data's own fit must be powerlaw's to the last bit first (else the p-values would measure
/// different distances). The power-law samples give large p, the log-normal sample a small
/// one (below CSN's 0.1).
#[test]
fn power_law_goodness_of_fit_matches_powerlaw_package_bootstrap() {
    let f = fixture_json("populations/powerlaw_gof.json");
    let b_ref = f["resamples"].as_u64().unwrap() as f64;
    let boot = Bootstrap {
        resamples: 1000,
        seed: 3,
    };
    for (name, case) in f["cases"].as_object().unwrap() {
        let data = nums(&case["data"]);
        let search = XminSearch::default();
        let fit = fit_power_law(&data, None, &search).unwrap();
        assert_eq!(
            fit.xmin,
            num(&case["xmin"]),
            "{name}: x_min (powerlaw 2.0.0)"
        );
        assert_close(
            fit.ks_distance,
            num(&case["D"]),
            1e-12,
            0.0,
            &format!("{name}: D"),
        );
        let gof = populations::goodness_of_fit(&data, &fit, None, &search, &boot, &|| {}).unwrap();
        let p_ref = num(&case["p"]);
        let p_mean = 0.5 * (gof.p_value + p_ref);
        let spread = (p_mean * (1.0 - p_mean) * (1.0 / b_ref + 1.0 / gof.fitted as f64)).sqrt();
        assert!(
            (gof.p_value - p_ref).abs() <= 4.0 * spread.max(0.005),
            "{name}: p {} against powerlaw's bootstrap {p_ref} (4 sigma = {})",
            gof.p_value,
            4.0 * spread
        );
        // The same with one thread (each synthetic set has its own random stream).
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap()
            .install(|| {
                populations::goodness_of_fit(&data, &fit, None, &search, &boot, &|| {}).unwrap()
            });
        assert_eq!(one, gof, "{name}: 1 thread");
        if name.starts_with("lognormal") {
            assert!(gof.p_value < 0.1 && p_ref < 0.1, "{name}: {}", gof.p_value);
        } else {
            assert!(gof.p_value > 0.3 && p_ref > 0.3, "{name}: {}", gof.p_value);
        }
    }
}

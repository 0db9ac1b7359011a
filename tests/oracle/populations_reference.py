"""Outside reference for cairn's populations module (src/populations/).

Run as `python tests/oracle/populations_reference.py OUTDIR`; writes OUTDIR/populations/*.json.

Sources (each value names the library that made it):
- powerlaw 2.0.0 (Alstott, Bullmore & Plenz 2014, PLoS ONE 9, e85777), which implements the
  continuous power-law fit of Clauset, Shalizi & Newman 2009 (SIAM Review 51, 661):
  `powerlaw.Fit(data, discrete=False, verbose=0)` -> alpha, xmin, sigma, D, and the per-candidate
  scan (`xmin_fitting_results`); `powerlaw.Fit(data, xmin=given)` -> power_law.alpha, standard
  error and D; `Fit(data, xmin=given).distribution_compare('power_law', 'lognormal')` (the
  log-likelihood ratio test of Clauset et al. section 5 with Vuong's normalisation) and the
  truncated log-normal it fits (`fit.lognormal.mu`, `.sigma`, `.loglikelihood`).
- scipy 1.17.1: `stats.ks_2samp` (methods 'auto', 'exact', 'asymp'), `stats.anderson_ksamp`
  (variant 'midrank', Scholz & Stephens 1987, JASA 82, 918), `stats.lognorm.fit(floc=0)`,
  `stats.t.interval` and `stats.chi2.ppf` (log-normal confidence intervals), `stats.linregress`,
  `special.log_ndtr` (a truncated log-normal's log-likelihood evaluated in logarithms).
- numpy 2.4.6 `percentile` (its default 'linear' method) for the medians and percentiles.
- numpy 2.4.6 `random.default_rng` with fixed seeds draws every sample. Samples are rounded to
  10 significant digits before use so the fixtures stay small; the rounded values are the ones
  stored and the ones every reference value is computed from.
"""
import contextlib
import io
import os
import warnings
from importlib.metadata import version

import numpy as np
import powerlaw
from scipy import stats

from common import out_dir, write_json

OUT = out_dir("populations")
# The installed versions, read from the packages' metadata (the pins are in requirements.txt).
VERSIONS = {name: version(name) for name in ("numpy", "scipy", "powerlaw")}
POWERLAW = f"powerlaw {VERSIONS['powerlaw']}"
SCIPY = f"scipy {VERSIONS['scipy']}"


def rounded(x):
    return np.array([float(f"{v:.10g}") for v in x])


def draw_power_law(rng, alpha, xmin, n):
    u = rng.random(n)
    return xmin * (1.0 - u) ** (-1.0 / (alpha - 1.0))


def quiet(fn, *args, **kwargs):
    """Runs fn with powerlaw's progress output and warnings silenced."""
    with warnings.catch_warnings(), contextlib.redirect_stdout(io.StringIO()), \
            contextlib.redirect_stderr(io.StringIO()):
        warnings.simplefilter("ignore")
        return fn(*args, **kwargs)


def power_law_case(name, data, given_xmin, keep_scan):
    fit = quiet(powerlaw.Fit, data, discrete=False, verbose=0)
    res = fit.xmin_fitting_results
    # The chosen candidate must come from powerlaw's closed-form branch (1.5 < alpha <= 3),
    # which is the estimator cairn implements; check it here so a fixture never silently
    # stores a numerically optimised alpha.
    tail = data[data >= fit.xmin]
    closed = 1.0 + len(tail) / np.sum(np.log(tail / fit.xmin))
    assert 1.5 < fit.alpha <= 3.0 and abs(fit.alpha - closed) <= 1e-12 * closed, (name, fit.alpha)
    fixed = quiet(powerlaw.Fit, data, discrete=False, xmin=given_xmin, verbose=0)
    pl = quiet(lambda: fixed.power_law)
    out = {
        "source": f"{POWERLAW} Fit(data, discrete=False) (Clauset, Shalizi & Newman 2009)",
        "versions": VERSIONS,
        "data": data,
        "fit": {"alpha": fit.alpha, "xmin": fit.xmin, "sigma": quiet(lambda: fit.sigma),
                "D": fit.D, "n_tail": int(np.sum(data >= fit.xmin))},
        "given_xmin": {"xmin": given_xmin, "alpha": pl.alpha, "sigma": pl.standard_err,
                       "D": pl.D, "n_tail": int(np.sum(data >= given_xmin))},
    }
    if keep_scan:
        out["scan"] = {"xmins": res["xmins"], "alphas": res["alphas"],
                       "distances": res["distances"],
                       "valid": [bool(v) for v in res["valid_fits"]]}
    write_json(os.path.join(OUT, f"powerlaw_{name}.json"), out)


def power_law_samples():
    """The power-law samples as (name, data, the true x_min given to the fits, whether the
    candidate scan is stored)."""
    out = []
    cases = [(2.35, 1.0), (1.8, 0.3)]
    for ci, (alpha, xmin) in enumerate(cases):
        for n in (50, 200, 2000):
            rng = np.random.default_rng(1000 + 10 * ci + n)
            data = rounded(draw_power_law(rng, alpha, xmin, n))
            out.append((f"a{alpha}_n{n}", data, xmin, n <= 200))
    # A log-normal body below a break at 2.0 and a power-law tail (alpha 2.35) above it.
    rng = np.random.default_rng(2024)
    body = rng.lognormal(np.log(0.7), 0.6, 5000)
    body = body[body < 2.0][:600]
    tail = draw_power_law(rng, 2.35, 2.0, 400)
    data = rounded(np.concatenate([body, tail]))
    out.append(("broken", data, 2.0, False))
    return out


def power_laws():
    for name, data, xmin, keep_scan in power_law_samples():
        power_law_case(name, data, xmin, keep_scan=keep_scan)


def tail_vs_lognormal():
    """powerlaw's comparison of a tail's power law with a log-normal truncated at the same given
    x_min: Fit(data, xmin=given).distribution_compare('power_law', 'lognormal'), with and
    without normalized_ratio=True, the fitted truncated log-normal's mu, sigma, log-likelihood
    and noise_flag, and the power law's log-likelihood. The log-normal is fitted by powerlaw's
    Nelder-Mead (tol 1e-4); powerlaw evaluates its density in linear space, which underflows far
    from the peak, so the log-likelihood at powerlaw's mu and sigma is also re-evaluated here in
    logarithms with scipy.special.log_ndtr (ln L = sum(-ln x - ln sigma - ln sqrt(2 pi) -
    (ln x - mu)^2 / (2 sigma^2)) - n ln Q((ln x_min - mu)/sigma), Q the normal upper tail)."""
    from scipy.special import log_ndtr
    samples = [(name, data, xmin) for name, data, xmin, _ in power_law_samples()]
    broken = samples[-1][1]
    # A log-normal sample above a lower mass below its peak, and the broken sample from inside
    # its log-normal body: tails curved like a log-normal.
    samples.append(("lognormal_n300", lognormal_samples()[300], 0.5))
    samples.append(("broken_body", broken, 1.0))
    out = {"source": f"{POWERLAW} Fit(data, xmin=given, discrete=False)"
                     ".distribution_compare('power_law', 'lognormal'); "
                     f"{SCIPY} special.log_ndtr",
           "versions": VERSIONS, "cases": {}}
    for name, data, xmin in samples:
        fit = quiet(powerlaw.Fit, data, xmin=xmin, discrete=False, verbose=0)
        tail = data[data >= xmin]
        # The power law must be powerlaw's closed form (1.5 < alpha <= 3), cairn's estimator.
        closed = 1.0 + len(tail) / np.sum(np.log(tail / xmin))
        pl = quiet(lambda: fit.power_law)
        assert 1.5 < pl.alpha <= 3.0 and abs(pl.alpha - closed) <= 1e-12 * closed, (name, pl.alpha)
        ln = quiet(lambda: fit.lognormal)
        r, p = quiet(fit.distribution_compare, "power_law", "lognormal")
        rn, pn = quiet(fit.distribution_compare, "power_law", "lognormal", normalized_ratio=True)
        assert p == pn, name
        y = np.log(tail)
        stable = np.sum(-y - np.log(ln.sigma) - 0.5 * np.log(2.0 * np.pi)
                        - (y - ln.mu) ** 2 / (2.0 * ln.sigma ** 2)) \
            - len(tail) * log_ndtr(-(np.log(xmin) - ln.mu) / ln.sigma)
        out["cases"][name] = {
            "data": data, "xmin": xmin, "n_tail": len(tail), "alpha": pl.alpha,
            "loglikelihood_power_law": np.sum(pl.loglikelihoods(tail)),
            "R": r, "R_normalized": rn, "p": p,
            "lognormal": {"mu": ln.mu, "sigma": ln.sigma, "loglikelihood": ln.loglikelihood,
                          "noise_flag": bool(ln.noise_flag),
                          "loglikelihood_log_ndtr": stable},
        }
    write_json(os.path.join(OUT, "tail_vs_lognormal.json"), out)


def ks_results(x, y):
    """scipy's two-sample KS test by each method."""
    out = {}
    for method in ("auto", "exact", "asymp"):
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            r = stats.ks_2samp(x, y, method=method)
        out[method] = {"statistic": r.statistic, "pvalue": r.pvalue}
    return out


def ks_case(x, y):
    return {"x": x, "y": y, **ks_results(x, y)}


def ks_pairs():
    rng = np.random.default_rng(77)
    pairs = {
        # small samples: 'auto' is exact (Hodges 1958 lattice-path counts)
        "small_same_12_15": (rng.lognormal(0, 0.5, 12), rng.lognormal(0, 0.5, 15)),
        "small_diff_16_16": (rng.lognormal(0, 0.5, 16), rng.lognormal(0.8, 0.5, 16)),
        "small_diff_18_20": (rng.lognormal(0, 0.5, 18), rng.lognormal(0.5, 0.7, 20)),
        "small_ties_10_14": (np.round(rng.lognormal(0, 0.5, 10), 1),
                             np.round(rng.lognormal(0.2, 0.5, 14), 1)),
        # larger samples: exact and asymptotic both checked
        "mid_same_150_250": (rng.lognormal(0, 0.5, 150), rng.lognormal(0, 0.5, 250)),
        "mid_diff_150_250": (rng.lognormal(0, 0.5, 150), rng.lognormal(0.15, 0.5, 250)),
        "large_same_300_400": (rng.lognormal(0, 0.5, 300), rng.lognormal(0, 0.5, 400)),
        "large_diff_300_400": (rng.lognormal(0, 0.5, 300), rng.lognormal(0.2, 0.55, 400)),
        "large_far_300_400": (rng.lognormal(0, 0.5, 300), rng.lognormal(0.5, 0.5, 400)),
    }
    out = {"source": f"{SCIPY} stats.ks_2samp", "versions": VERSIONS, "pairs": {}}
    for name, (x, y) in pairs.items():
        out["pairs"][name] = ks_case(rounded(x), rounded(y))
    write_json(os.path.join(OUT, "ks_2samp.json"), out)


def ad_case(samples):
    """scipy's k-sample Anderson-Darling test (midrank) and whether its p-value was capped."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        r = stats.anderson_ksamp(samples, variant="midrank")
    capped = any("p-value capped" in str(w.message) or "p-value floored" in str(w.message)
                 for w in caught)
    return {"statistic": r.statistic, "pvalue": r.pvalue, "capped": capped}


def ad_sets():
    rng = np.random.default_rng(91)
    sets = {
        "two_same_small": [rng.lognormal(0, 0.5, 12), rng.lognormal(0, 0.5, 15)],
        "two_shift_mid": [rng.lognormal(0, 0.5, 80), rng.lognormal(0.2, 0.5, 90)],
        "two_diff_large": [rng.lognormal(0, 0.5, 300), rng.lognormal(0.5, 0.5, 400)],
        "three_mixed": [rng.lognormal(0, 0.5, 50), rng.lognormal(0.1, 0.5, 60),
                        rng.lognormal(0.25, 0.5, 70)],
        "three_ties": [np.round(rng.lognormal(0, 0.5, 40), 1),
                       np.round(rng.lognormal(0.1, 0.5, 45), 1),
                       np.round(rng.lognormal(0.2, 0.5, 50), 1)],
    }
    out = {"source": f"{SCIPY} stats.anderson_ksamp(variant='midrank')",
           "versions": VERSIONS, "sets": {}}
    for name, samples in sets.items():
        samples = [rounded(s) for s in samples]
        out["sets"][name] = {"samples": samples, **ad_case(samples)}
    write_json(os.path.join(OUT, "anderson_ksamp.json"), out)


def lognormal_samples():
    """The log-normal samples (median 0.8, sigma 0.5 in ln M) by size."""
    out = {}
    for i, n in enumerate((30, 300, 5, 12, 3)):
        rng = np.random.default_rng(500 + i)
        out[n] = rounded(rng.lognormal(np.log(0.8), 0.5, n))
    return out


def lognormals():
    # The fit, and the exact central 68.27% confidence intervals of the mean and standard
    # deviation of ln M: scipy's Student t interval (stats.t.interval with the standard error
    # s / sqrt(n), s with ddof=1) and the chi-square interval s sqrt((n - 1) / chi2.ppf(q, n - 1))
    # at the two tails' quantiles (the textbook interval for a normal standard deviation).
    level = stats.norm.cdf(1.0) - stats.norm.cdf(-1.0)
    out = {"source": f"{SCIPY} stats.lognorm.fit(data, floc=0); stats.t.interval; stats.chi2.ppf",
           "versions": VERSIONS, "level": level, "samples": {}}
    for n, data in lognormal_samples().items():
        shape, loc, scale = stats.lognorm.fit(data, floc=0)
        y = np.log(data)
        s = np.std(y, ddof=1)
        mu_lo, mu_hi = stats.t.interval(level, n - 1, loc=np.mean(y), scale=s / np.sqrt(n))
        q = (1.0 + level) / 2.0
        sigma_lo = s * np.sqrt((n - 1) / stats.chi2.ppf(q, n - 1))
        sigma_hi = s * np.sqrt((n - 1) / stats.chi2.ppf(1.0 - q, n - 1))
        out["samples"][f"n{n}"] = {"data": data, "shape": shape, "loc": loc, "scale": scale,
                                   "mu_interval": [mu_lo, mu_hi],
                                   "sigma_interval": [sigma_lo, sigma_hi]}
    write_json(os.path.join(OUT, "lognormal.json"), out)


def mass_size():
    out = {"source": f"{SCIPY} stats.linregress(log10 R, log10 M)", "versions": VERSIONS,
           "populations": {}}
    for i, (n, a, b, scatter) in enumerate(((80, 0.3, 2.0, 0.25), (60, 0.6, 1.7, 0.2))):
        rng = np.random.default_rng(700 + i)
        logr = rng.uniform(-2.0, -0.5, n)
        logm = a + b * logr + rng.normal(0.0, scatter, n)
        radius = rounded(10.0 ** logr)
        mass = rounded(10.0 ** logm)
        r = stats.linregress(np.log10(radius), np.log10(mass))
        out["populations"][f"pop{i}"] = {
            "radius": radius, "mass": mass, "slope": r.slope, "intercept": r.intercept,
            "stderr": r.stderr, "intercept_stderr": r.intercept_stderr, "rvalue": r.rvalue}
    write_json(os.path.join(OUT, "mass_size.json"), out)


def tests_above():
    """Three invented populations of (radius, mass) pairs and a common lower mass: scipy's
    two-sample KS tests (each pair, masses and radii), k-sample Anderson-Darling tests and
    linregress(log10 R, log10 M) on the leaves at or above that mass, as `cairn compare
    --tests-above` must compute them (and the Anderson-Darling tests on every leaf, to show the
    cut changes them). One mass of A is set to the cut exactly, which the cut keeps; C keeps
    only four leaves."""
    cut = 1.0
    rng = np.random.default_rng(903)
    pops = {}
    for name, (n, a, b, scatter, lo, hi) in {"A": (120, 2.5, 2.0, 0.3, -1.6, -0.6),
                                              "B": (90, 2.6, 1.8, 0.25, -1.5, -0.7),
                                              "C": (30, 2.4, 2.1, 0.3, -1.6, -1.2)}.items():
        logr = rng.uniform(lo, hi, n)
        logm = a + b * logr + rng.normal(0.0, scatter, n)
        pops[name] = {"radius": rounded(10.0 ** logr), "mass": rounded(10.0 ** logm)}
    pops["A"]["mass"][0] = cut
    kept = {k: p["mass"] >= cut for k, p in pops.items()}
    assert int(np.sum(kept["C"])) == 4, int(np.sum(kept["C"]))
    out = {"source": f"{SCIPY} stats.ks_2samp, stats.anderson_ksamp(variant='midrank'), "
                     "stats.linregress(log10 R, log10 M) on the leaves at or above the cut",
           "versions": VERSIONS, "cut": cut, "populations": pops,
           "n_kept": {k: int(np.sum(v)) for k, v in kept.items()},
           "pairs": [], "anderson": {}, "anderson_every_leaf": {}, "linregress": {}}
    names = list(pops)
    for i, a in enumerate(names):
        for b in names[i + 1:]:
            out["pairs"].append({
                "a": a, "b": b,
                "mass": ks_results(pops[a]["mass"][kept[a]], pops[b]["mass"][kept[b]]),
                "radius": ks_results(pops[a]["radius"][kept[a]], pops[b]["radius"][kept[b]])})
    for key in ("mass", "radius"):
        out["anderson"][key] = ad_case([pops[k][key][kept[k]] for k in names])
        out["anderson_every_leaf"][key] = ad_case([pops[k][key] for k in names])
    for k in names:
        r = stats.linregress(np.log10(pops[k]["radius"][kept[k]]),
                             np.log10(pops[k]["mass"][kept[k]]))
        out["linregress"][k] = {"slope": r.slope, "intercept": r.intercept,
                                "stderr": r.stderr, "intercept_stderr": r.intercept_stderr}
    write_json(os.path.join(OUT, "tests_above.json"), out)


def mass_size_bootstrap():
    """A large invented population with Gaussian scatter of constant width in log10 M about a
    line in log10 R, and scipy's linregress on it: its stderr is what the paired bootstrap's
    standard deviation of the slope must approach on such a sample."""
    rng = np.random.default_rng(7100)
    n = 3000
    logr = rng.uniform(-2.0, -0.5, n)
    logm = 0.5 + 2.0 * logr + rng.normal(0.0, 0.3, n)
    radius = rounded(10.0 ** logr)
    mass = rounded(10.0 ** logm)
    r = stats.linregress(np.log10(radius), np.log10(mass))
    write_json(os.path.join(OUT, "mass_size_bootstrap.json"),
               {"source": f"{SCIPY} stats.linregress(log10 R, log10 M)", "versions": VERSIONS,
                "radius": radius, "mass": mass, "slope": r.slope, "stderr": r.stderr})


def percentiles():
    """numpy.percentile (default method 'linear') of samples of several sizes, ties included."""
    qs = [0.0, 1.0, 16.0, 25.0, 50.0, 75.0, 84.0, 99.5, 100.0]
    out = {"source": f"numpy {VERSIONS['numpy']} percentile(method='linear')", "versions": VERSIONS,
           "q": qs, "samples": {}}
    rng = np.random.default_rng(4242)
    for n in (1, 2, 3, 10, 57, 1000):
        data = rounded(rng.lognormal(0.0, 1.0, n))
        out["samples"][f"n{n}"] = {"data": data, "percentiles": np.percentile(data, qs)}
    ties = np.round(rng.lognormal(0.0, 0.5, 40), 1)
    out["samples"]["ties40"] = {"data": ties, "percentiles": np.percentile(ties, qs)}
    # Many equal values (a constant column; the bootstrap's lower masses when it is fixed):
    # 30,000 of one value, and 30,000 with a few others below and above. Stored as distinct
    # values and their counts; the sample is each value repeated its count.
    out["repeated"] = {}
    for name, values, counts in (("equal30000", [2.5], [30000]),
                                 ("mostly_equal30000", [0.5, 1.25, 3.0], [300, 29400, 300])):
        data = np.repeat(np.array(values), counts)
        out["repeated"][name] = {"values": values, "counts": counts,
                                 "percentiles": np.percentile(data, qs)}
    write_json(os.path.join(OUT, "percentiles.json"), out)


def powerlaw_gof():
    """The goodness of fit of a power-law tail by the semi-parametric bootstrap of Clauset,
    Shalizi & Newman 2009 (section 4.1), with powerlaw's own fits: the data fitted by
    Fit(data, discrete=False) (x_min searched); each synthetic set holds n masses, each drawn
    with probability n_tail / n from the fitted power law above x_min and otherwise uniformly
    from the data below x_min (numpy's default_rng with a fixed seed), and is fitted the same
    way; p is the fraction of sets whose D is at least the data's. A Monte Carlo estimate: cairn
    draws other random numbers, so its p agrees within the binomial spread of the two."""
    resamples = 400
    cases = [(name, data) for name, data, _, _ in power_law_samples()
             if name in ("a2.35_n200", "a1.8_n200")]
    cases.append(("lognormal_n300", lognormal_samples()[300]))
    out = {"source": f"{POWERLAW} Fit(data, discrete=False) on each synthetic set of the "
                     "semi-parametric bootstrap (Clauset, Shalizi & Newman 2009, section 4.1); "
                     f"numpy {VERSIONS['numpy']} default_rng",
           "versions": VERSIONS, "resamples": resamples, "cases": {}}
    for ci, (name, data) in enumerate(cases):
        fit = quiet(powerlaw.Fit, data, discrete=False, verbose=0)
        d0, xmin, alpha = fit.D, fit.xmin, fit.alpha
        below = np.sort(data[data < xmin])
        n = len(data)
        p_tail = np.sum(data >= xmin) / n
        rng = np.random.default_rng(7000 + ci)
        at_least = fitted = 0
        for _ in range(resamples):
            from_tail = rng.random(n) < p_tail if len(below) else np.ones(n, bool)
            k = int(from_tail.sum())
            synthetic = np.empty(n)
            synthetic[from_tail] = xmin * (1.0 - rng.random(k)) ** (-1.0 / (alpha - 1.0))
            if n - k:
                synthetic[~from_tail] = below[rng.integers(0, len(below), n - k)]
            f = quiet(powerlaw.Fit, synthetic, discrete=False, verbose=0)
            if not np.isfinite(f.D):
                continue
            fitted += 1
            at_least += int(f.D >= d0)
        out["cases"][name] = {"data": data, "D": d0, "xmin": xmin, "alpha": alpha,
                              "fitted": fitted, "p": at_least / fitted}
    write_json(os.path.join(OUT, "powerlaw_gof.json"), out)


if __name__ == "__main__":
    percentiles()
    power_laws()
    ks_pairs()
    ad_sets()
    lognormals()
    mass_size()
    tail_vs_lognormal()
    tests_above()
    mass_size_bootstrap()
    powerlaw_gof()

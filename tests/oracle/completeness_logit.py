"""Outside reference for cairn's unbinned completeness limit (src/completeness.rs): a
maximum-likelihood logistic fit of recovery (0 or 1 per core) against x = log10(true mass /
Msun), P(recovered) = 1 / (1 + exp(-(a + b x))).

Run as `python tests/oracle/completeness_logit.py OUTDIR`; writes
OUTDIR/inject/completeness_logit.json.

Sources:
- statsmodels 0.15.0 `Logit(y, [1, x]).fit(method='newton', tol=1e-14)`: a and b
  (`params`), their standard errors (`bse`) and covariance (`cov_params()`, the inverse of
  the Fisher information at the maximum); for the separated case, that it finds no maximum
  (no convergence in 100 steps, the slope running off).
- numpy 2.4.6: `random.default_rng` with fixed seeds draws the masses and outcomes; the masses
  at 50% and 90% recovery, log10 M_p = (ln(p / (1 - p)) - a) / b, and their standard errors by
  the delta method from statsmodels' covariance:
  var(log10 M_p) = (var(a) + 2 x_p cov(a, b) + x_p^2 var(b)) / b^2.
Masses are rounded to 10 significant digits; the rounded values are stored and are the ones
every reference value is computed from (x = numpy.log10 of them).
"""
import os
import warnings
from importlib.metadata import version

import numpy as np
import statsmodels.api as sm

from common import out_dir, write_json

OUT = out_dir("inject")
VERSIONS = {name: version(name) for name in ("numpy", "statsmodels")}
SOURCE = (f"statsmodels {VERSIONS['statsmodels']} Logit(y, [1, x]).fit(method='newton', "
          f"tol=1e-14); delta method in numpy {VERSIONS['numpy']}")


def masses(rng, n, lo, hi):
    """n masses drawn uniformly in log10 between lo and hi Msun, to 10 significant digits."""
    x = rng.uniform(np.log10(lo), np.log10(hi), n)
    return np.array([float(f"{v:.10g}") for v in 10.0 ** x])


def outcomes(rng, x, a, b):
    p = 1.0 / (1.0 + np.exp(-(a + b * x)))
    return (rng.random(len(x)) < p).astype(int)


def fit(m, y):
    x = np.log10(m)
    exog = np.column_stack([np.ones_like(x), x])
    res = sm.Logit(y, exog).fit(method="newton", tol=1e-14, maxiter=100, disp=0)
    assert res.mle_retvals["converged"], "statsmodels did not converge"
    a, b = res.params
    cov = res.cov_params()
    out = {"a": a, "b": b, "a_err": res.bse[0], "b_err": res.bse[1], "cov_ab": cov[0, 1],
           "iterations": int(res.mle_retvals["iterations"])}
    for p, name in ((0.5, "50"), (0.9, "90")):
        xp = (np.log(p / (1.0 - p)) - a) / b
        var = (cov[0, 0] + 2.0 * xp * cov[0, 1] + xp * xp * cov[1, 1]) / (b * b)
        out[f"log10_m{name}"] = xp
        out[f"log10_m{name}_err"] = np.sqrt(var)
        out[f"m{name}"] = 10.0 ** xp
        # Outside the injected masses: an extrapolation of the fitted curve.
        out[f"m{name}_extrapolated"] = bool(xp < x.min() or xp > x.max())
    return out


def drawn_case(name, seed, n, lo, hi, a, b):
    rng = np.random.default_rng(seed)
    m = masses(rng, n, lo, hi)
    y = outcomes(rng, np.log10(m), a, b)
    assert 0 < y.sum() < n
    return {"name": name, "seed": seed, "drawn_with": {"a": a, "b": b, "mass_lo": lo,
                                                      "mass_hi": hi},
            "masses": m, "recovered": y, "fit": fit(m, y)}


def separated_case():
    """Every core above 1 Msun recovered, every one below missed: no maximum exists."""
    rng = np.random.default_rng(11)
    m = masses(rng, 16, 0.1, 10.0)
    y = (m > 1.0).astype(int)
    x = np.log10(m)
    exog = np.column_stack([np.ones_like(x), x])
    # statsmodels finds no maximum either: in 100 Newton steps it does not converge and its
    # slope runs off towards infinity (none of its numbers is stored).
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = sm.Logit(y, exog).fit(method="newton", tol=1e-14, maxiter=100, disp=0)
    assert not res.mle_retvals["converged"] and res.params[1] > 100.0, res.params
    return {"name": "separated", "seed": 11, "masses": m, "recovered": y, "fit": None,
            "reason": "separated", "heaviest_missed": m[y == 0].max(),
            "lightest_recovered": m[y == 1].min()}


def all_recovered_case():
    rng = np.random.default_rng(12)
    m = masses(rng, 10, 0.1, 10.0)
    return {"name": "all_recovered", "seed": 12, "masses": m,
            "recovered": np.ones(len(m), dtype=int), "fit": None, "reason": "all_recovered"}


def main():
    cases = [
        drawn_case("n40", 1, 40, 0.1, 5.0, 1.0, 4.0),
        drawn_case("n200", 2, 200, 0.1, 5.0, 0.5, 3.0),
        drawn_case("n1000", 3, 1000, 0.05, 10.0, -0.3, 6.0),
        # A shallow curve whose 90% point lies above the heaviest injected core.
        drawn_case("n200_shallow", 4, 200, 0.1, 3.0, -1.0, 2.0),
        separated_case(),
        all_recovered_case(),
    ]
    assert cases[3]["fit"]["m90_extrapolated"]
    write_json(os.path.join(OUT, "completeness_logit.json"),
               {"source": SOURCE, "versions": VERSIONS, "cases": cases})


if __name__ == "__main__":
    main()

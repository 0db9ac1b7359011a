//! Statistics of core populations: mass functions, power-law tails, log-normal fits,
//! two-sample and k-sample comparisons, and the mass-size relation.
//!
//! This module is a library only; it reads plain slices of masses (or sizes) and returns plain
//! values. Every random number (bootstraps) comes from ChaCha8 seeded by the caller, one stream
//! per resample, so results are identical whatever the rayon thread count.
//!
//! Methods and their sources:
//! - [`mass_function`](mod@mass_function): the differential mass function dN/dlog10 M in logarithmic bins with
//!   Poisson errors sqrt(N) and the approximate 84.13% (one-sided "1 sigma") confidence limits
//!   for small counts of Gehrels 1986 (ApJ 303, 336, equations 7 and 12 with S = 1);
//!   the cumulative number N(>= M).
//! - [`powerlaw`]: the continuous power-law tail dN/dM ~ M^-alpha above x_min by maximum
//!   likelihood, alpha = 1 + n / sum ln(x_i / x_min), with x_min chosen by minimising the
//!   Kolmogorov-Smirnov distance between the tail and the fitted law (Clauset, Shalizi & Newman
//!   2009, SIAM Review 51, 661, sections 3.1 and 3.3); the standard error (alpha - 1)/sqrt(n);
//!   a seeded bootstrap; the goodness of fit by the semi-parametric bootstrap (section 4.1). The slope of dN/dlog M is -(alpha - 1). The candidate set and distance
//!   follow powerlaw 2.0.0 (Alstott, Bullmore & Plenz 2014, PLoS ONE 9, e85777), see there.
//! - [`lognormal`]: the maximum-likelihood log-normal (closed form for mu and sigma of ln M),
//!   as `scipy.stats.lognorm.fit(data, floc=0)`, with the exact 68.27% confidence intervals of
//!   mu (Student's t) and sigma (chi-square) for samples of any size.
//! - [`ks`]: the two-sample Kolmogorov-Smirnov test with the exact null distribution of Hodges
//!   1958 (Arkiv for Matematik 3, 469) in the form used by scipy 1.17 (Viehmann 2021,
//!   arXiv:2102.08037), and the large-sample distribution of the one-sample statistic at
//!   n = m n / (m + n) (Simard & L'Ecuyer 2011, J. Stat. Softw. 39, 11; Durbin 1968 / Marsaglia,
//!   Tsang & Wang 2003; Pelz & Good 1976; Birnbaum & Tingey 1951).
//! - [`anderson`]: the k-sample Anderson-Darling test (Scholz & Stephens 1987, JASA 82, 918),
//!   midrank version, with the p-value interpolated from their table of critical values.
//! - [`tail_lognormal`]: the tail's power law against a log-normal truncated at the same
//!   x_min and fitted to the same masses, by the log-likelihood ratio R, its normalised form and
//!   the two-sided p-value of Vuong 1989 (Econometrica 57, 307), as Clauset, Shalizi & Newman
//!   2009 (section 5) and powerlaw 2.0.0's `distribution_compare` do it.
//! - [`regression`]: least squares log10 M = a + b log10 R with standard errors and rms
//!   scatter; a seeded paired bootstrap of the slope; the difference of two slopes and its
//!   significance.
//! - [`summary`]: median and percentiles (linear interpolation between order statistics,
//!   numpy's default "linear" method, Hyndman & Fan 1996 definition 7).

pub mod anderson;
pub mod ks;
pub mod lognormal;
pub mod mass_function;
pub mod powerlaw;
pub mod regression;
pub mod summary;
pub mod tail_lognormal;

pub use anderson::{AndersonKSample, anderson_ksamp};
pub use ks::{KsMethod, KsTwoSample, ks_2samp};
pub use lognormal::{LogNormalFit, fit_lognormal};
pub use mass_function::{
    Binning, GehrelsLimits, MassFunction, MassFunctionBin, cumulative_counts, gehrels_limits,
    mass_function,
};
pub use powerlaw::{
    ALPHA_CEILING, Bootstrap, NoTail, PowerLawBootstrap, PowerLawFit, PowerLawGof, TailFailures,
    XminCandidate, XminSearch, bootstrap_power_law, bootstrap_power_law_with, fit_power_law,
    goodness_of_fit, power_law_alpha, scan_xmin, try_fit_power_law,
};
pub use regression::{
    LineFit, SlopeBootstrap, SlopeDifference, bootstrap_mass_size, bootstrap_mass_size_with,
    bootstrap_slope, bootstrap_slope_with, fit_line, fit_mass_size, slope_difference,
};
pub use summary::{median, percentile, percentiles};
pub use tail_lognormal::{
    TailVsLogNormal, TruncatedLogNormal, Verdict, fit_truncated_lognormal, power_law_vs_lognormal,
};

use crate::error::Error;

/// Checks that every value is finite (and positive when `positive`), naming the quantity.
pub(crate) fn check_values(values: &[f64], what: &str, positive: bool) -> Result<(), Error> {
    if values.is_empty() {
        return Err(Error::usage(format!(
            "no {what} were given; pass at least one value"
        )));
    }
    for &v in values {
        if !v.is_finite() || (positive && v <= 0.0) {
            let need = if positive {
                "finite and positive"
            } else {
                "finite"
            };
            return Err(Error::usage(format!(
                "{what} must be {need}, but {v} was given; remove or correct that value"
            )));
        }
    }
    Ok(())
}

/// A sorted copy (ascending, total order on finite values).
pub(crate) fn sorted(values: &[f64]) -> Vec<f64> {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    v
}

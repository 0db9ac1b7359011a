//! Power-law tail of a mass distribution by maximum likelihood (Clauset, Shalizi & Newman 2009,
//! SIAM Review 51, 661; CSN below).
//!
//! Model: above x_min the masses follow the continuous law p(x) = (alpha - 1)/x_min
//! (x / x_min)^-alpha, i.e. dN/dM ~ M^-alpha. In logarithmic units dN/dlog M ~ M^-(alpha - 1):
//! the slope of dN/dlog M is -(alpha - 1) (for example alpha = 2.35 gives -1.35).
//!
//! - alpha for a given x_min: the maximum-likelihood estimator alpha = 1 + n / sum ln(x_i/x_min)
//!   over the n masses x_i >= x_min (CSN eq. 3.1), with standard error (alpha - 1)/sqrt(n)
//!   (CSN eq. 3.2, the large-n Fisher error; powerlaw 2.0.0 reports the same as `sigma`).
//! - x_min, when not given (CSN section 3.3): every distinct mass is a candidate except the
//!   largest `min_tail_distinct - 1` distinct masses, so the tail above a candidate holds at
//!   least `min_tail_distinct` distinct masses. The default, 3, is powerlaw 2.0.0's rule: its
//!   candidate range is the masses strictly below the maximum, and it then drops the last
//!   remaining candidate, so the two largest distinct masses are never tried. For each candidate the tail is fitted and the
//!   Kolmogorov-Smirnov distance D = max |F_fit(u) - S(u)| is taken over the distinct tail
//!   masses u, where S(u) is the fraction of the tail strictly below u (the empirical CDF just
//!   before the step, as powerlaw 2.0.0 computes it). The candidate with the smallest D among
//!   the admissible ones wins (the first one on exact ties). A candidate is admissible when its
//!   alpha lies strictly inside `alpha_range`, default (1, 3): alpha must exceed 1 for the law to
//!   be normalisable, and the upper bound 3 is powerlaw 2.0.0's default parameter range, which
//!   keeps a handful of the most massive objects with a steep, noisy alpha from being chosen.
//!   Widen it (e.g. to (1, 10)) for steeper tails.
//!
//!   Difference from powerlaw 2.0.0, documented rather than copied: for candidates whose
//!   closed-form alpha is at most 1.5, powerlaw replaces it by a numerical likelihood
//!   maximisation inside [0, 3]; cairn always uses the closed form (the exact maximum for a
//!   continuous law without an upper cut-off). The two agree whenever the chosen candidate has
//!   alpha above 1.5, which the reference fixtures check.
//! - Goodness of fit (CSN section 4.1): [`goodness_of_fit`], the semi-parametric bootstrap
//!   p-value of the KS distance.
//! - Bootstrap (CSN section 3.4): the whole sample is resampled with replacement and refitted
//!   (searching x_min again unless it was given); the spread of alpha and x_min over resamples
//!   is their uncertainty. Resample r draws from ChaCha8 seeded by `seed` on stream r, so the
//!   results do not depend on the rayon thread count. Cost: one x_min search is O(n^2).

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use super::summary::quantiles_of;
use super::{check_values, sorted};
use crate::error::Error;

/// How x_min is searched for when not given.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct XminSearch {
    /// Smallest number of distinct masses in the tail above a candidate x_min (at least 2;
    /// default 3 as powerlaw 2.0.0).
    pub min_tail_distinct: usize,
    /// Open interval of admissible alpha for a candidate.
    pub alpha_range: (f64, f64),
}

impl Default for XminSearch {
    /// powerlaw 2.0.0's choices: every distinct value but the two largest; alpha in (1, 3).
    fn default() -> Self {
        XminSearch {
            min_tail_distinct: 3,
            alpha_range: (1.0, 3.0),
        }
    }
}

/// One candidate x_min and the fit of the tail above it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct XminCandidate {
    /// The candidate (a mass of the sample).
    pub xmin: f64,
    /// Maximum-likelihood alpha of the tail.
    pub alpha: f64,
    /// Number of masses >= xmin.
    pub n_tail: usize,
    /// Kolmogorov-Smirnov distance between the tail and the fitted law.
    pub ks_distance: f64,
    /// Whether alpha lies inside the admissible range.
    pub admissible: bool,
}

/// A fitted power-law tail.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PowerLawFit {
    /// Exponent of dN/dM ~ M^-alpha.
    pub alpha: f64,
    /// Lower end of the power-law range.
    pub xmin: f64,
    /// Whether x_min was searched for (false when given).
    pub xmin_fitted: bool,
    /// Number of masses >= x_min.
    pub n_tail: usize,
    /// Number of masses given.
    pub n_total: usize,
    /// Standard error (alpha - 1)/sqrt(n_tail).
    pub alpha_error: f64,
    /// Kolmogorov-Smirnov distance between the tail and the fitted law.
    pub ks_distance: f64,
}

impl PowerLawFit {
    /// Slope of dN/dlog M, -(alpha - 1).
    pub fn dlogm_slope(&self) -> f64 {
        -(self.alpha - 1.0)
    }
}

/// Closed-form alpha and KS distance for the tail `tail` (sorted, all >= xmin).
/// `logs` is scratch space.
fn fit_tail(tail: &[f64], xmin: f64, logs: &mut Vec<f64>) -> (f64, f64) {
    logs.clear();
    logs.extend(tail.iter().map(|&x| (x / xmin).ln()));
    let n = tail.len();
    let alpha = 1.0 + n as f64 / logs.iter().sum::<f64>();
    let mut d: f64 = 0.0;
    let mut j = 0;
    while j < n {
        let empirical = j as f64 / n as f64;
        let model = 1.0 - ((1.0 - alpha) * logs[j]).exp();
        d = d.max((model - empirical).abs());
        let u = tail[j];
        while j < n && tail[j] == u {
            j += 1;
        }
    }
    (alpha, d)
}

/// Maximum-likelihood alpha for masses >= xmin, and the tail size (CSN eq. 3.1).
pub fn power_law_alpha(masses: &[f64], xmin: f64) -> Result<(f64, usize), Error> {
    let fit = fit_power_law(masses, Some(xmin), &XminSearch::default())?;
    Ok((fit.alpha, fit.n_tail))
}

/// The fit for every candidate x_min (see the module documentation), in increasing x_min.
pub fn scan_xmin(masses: &[f64], search: &XminSearch) -> Result<Vec<XminCandidate>, Error> {
    check_values(masses, "masses", true)?;
    Ok(scan_sorted(&sorted(masses), search))
}

fn scan_sorted(s: &[f64], search: &XminSearch) -> Vec<XminCandidate> {
    // First index of each distinct value.
    let starts: Vec<usize> = (0..s.len())
        .filter(|&i| i == 0 || s[i] != s[i - 1])
        .collect();
    let keep = starts
        .len()
        .saturating_sub(search.min_tail_distinct.max(2) - 1);
    let (lo, hi) = search.alpha_range;
    starts[..keep]
        .par_iter()
        .map_init(Vec::new, |logs, &i| {
            let xmin = s[i];
            let tail = &s[i..];
            let (alpha, d) = fit_tail(tail, xmin, logs);
            XminCandidate {
                xmin,
                alpha,
                n_tail: tail.len(),
                ks_distance: d,
                admissible: alpha.is_finite() && alpha > lo && alpha < hi && d.is_finite(),
            }
        })
        .collect()
}

fn fit_sorted(s: &[f64], xmin: Option<f64>, search: &XminSearch) -> Result<PowerLawFit, Error> {
    let n_total = s.len();
    let (alpha, xmin, n_tail, d, fitted) = match xmin {
        Some(xmin) => {
            if !(xmin.is_finite() && xmin > 0.0) {
                return Err(Error::usage(format!(
                    "the power-law x_min must be a positive mass, not {xmin}"
                )));
            }
            let i = s.partition_point(|&x| x < xmin);
            let tail = &s[i..];
            if tail.iter().filter(|&&x| x > xmin).count() == 0 {
                return Err(Error::usage(format!(
                    "no mass lies above x_min = {xmin}, so no power law can be fitted; \
                     choose a smaller x_min"
                )));
            }
            let (alpha, d) = fit_tail(tail, xmin, &mut Vec::new());
            (alpha, xmin, tail.len(), d, false)
        }
        None => {
            let best = scan_sorted(s, search)
                .into_iter()
                .filter(|c| c.admissible)
                .fold(None::<XminCandidate>, |best, c| match best {
                    Some(b) if b.ks_distance <= c.ks_distance => Some(b),
                    _ => Some(c),
                })
                .ok_or_else(|| {
                    Error::usage(format!(
                        "no candidate x_min gives a power-law exponent between {} and {} \
                         (with at least {} distinct masses in the tail); give x_min or widen \
                         the admissible range",
                        search.alpha_range.0,
                        search.alpha_range.1,
                        search.min_tail_distinct.max(2)
                    ))
                })?;
            (best.alpha, best.xmin, best.n_tail, best.ks_distance, true)
        }
    };
    Ok(PowerLawFit {
        alpha,
        xmin,
        xmin_fitted: fitted,
        n_tail,
        n_total,
        alpha_error: (alpha - 1.0) / (n_tail as f64).sqrt(),
        ks_distance: d,
    })
}

/// Fits dN/dM ~ M^-alpha above `xmin`, or above the x_min found by the KS search when `xmin`
/// is `None`.
pub fn fit_power_law(
    masses: &[f64],
    xmin: Option<f64>,
    search: &XminSearch,
) -> Result<PowerLawFit, Error> {
    check_values(masses, "masses", true)?;
    fit_sorted(&sorted(masses), xmin, search)
}

/// Bootstrap settings.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Bootstrap {
    /// Number of resamples.
    pub resamples: usize,
    /// Seed of the ChaCha8 generator (resample r uses stream r).
    pub seed: u64,
}

/// Bootstrap distribution of a power-law fit.
#[derive(Debug, Clone, PartialEq)]
pub struct PowerLawBootstrap {
    /// alpha of each successful resample, in resample order.
    pub alphas: Vec<f64>,
    /// x_min of each successful resample, in resample order.
    pub xmins: Vec<f64>,
    /// Resamples where no admissible x_min was found (left out).
    pub n_failed: usize,
    /// Standard deviation of alpha over resamples (n - 1 in the denominator).
    pub alpha_std: f64,
    /// Standard deviation of x_min over resamples.
    pub xmin_std: f64,
    /// 16th, 50th and 84th percentiles of alpha.
    pub alpha_percentiles: [f64; 3],
    /// 16th, 50th and 84th percentiles of x_min.
    pub xmin_percentiles: [f64; 3],
}

fn std_dev(v: &[f64]) -> f64 {
    if v.len() < 2 {
        return f64::NAN;
    }
    let mean = v.iter().sum::<f64>() / v.len() as f64;
    (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (v.len() - 1) as f64).sqrt()
}

/// The 16th, 50th and 84th percentiles of the finite values of `v` (NaN if none).
fn p16_50_84(v: &[f64]) -> [f64; 3] {
    let finite: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if finite.is_empty() {
        return [f64::NAN; 3];
    }
    let q = quantiles_of(&finite, &[16.0, 50.0, 84.0]);
    [q[0], q[1], q[2]]
}

/// Bootstrap uncertainty of the power-law fit: resample all masses with replacement and refit
/// (x_min searched again when `xmin` is `None`).
pub fn bootstrap_power_law(
    masses: &[f64],
    xmin: Option<f64>,
    search: &XminSearch,
    boot: &Bootstrap,
) -> Result<PowerLawBootstrap, Error> {
    bootstrap_power_law_with(masses, xmin, search, boot, &|| {})
}

/// [`bootstrap_power_law`], calling `tick` once per resample (from any thread), for progress.
pub fn bootstrap_power_law_with(
    masses: &[f64],
    xmin: Option<f64>,
    search: &XminSearch,
    boot: &Bootstrap,
    tick: &(dyn Fn() + Sync),
) -> Result<PowerLawBootstrap, Error> {
    check_values(masses, "masses", true)?;
    if boot.resamples < 2 {
        return Err(Error::usage("a bootstrap needs at least 2 resamples"));
    }
    let n = masses.len();
    let results: Vec<Option<(f64, f64)>> = (0..boot.resamples)
        .into_par_iter()
        .map(|r| {
            let mut rng = ChaCha8Rng::seed_from_u64(boot.seed);
            rng.set_stream(r as u64);
            let mut sample: Vec<f64> = (0..n).map(|_| masses[rng.random_range(0..n)]).collect();
            sample.sort_by(f64::total_cmp);
            let fit = fit_sorted(&sample, xmin, search)
                .ok()
                .map(|f| (f.alpha, f.xmin));
            tick();
            fit
        })
        .collect();
    let (alphas, xmins): (Vec<f64>, Vec<f64>) = results.iter().flatten().copied().unzip();
    Ok(PowerLawBootstrap {
        n_failed: results.len() - alphas.len(),
        alpha_std: std_dev(&alphas),
        xmin_std: std_dev(&xmins),
        alpha_percentiles: p16_50_84(&alphas),
        xmin_percentiles: p16_50_84(&xmins),
        alphas,
        xmins,
    })
}

/// Random stream offset of the goodness-of-fit resamples (the bootstrap's are 0..resamples).
const GOF_STREAMS: u64 = 1 << 40;

/// The goodness of fit of a power-law tail (CSN section 4.1).
#[derive(Debug, Clone, PartialEq)]
pub struct PowerLawGof {
    /// The fraction of synthetic data sets whose fitted KS distance is at least the data's.
    pub p_value: f64,
    /// Synthetic data sets fitted.
    pub fitted: usize,
    /// Synthetic data sets with no admissible tail (left out).
    pub n_failed: usize,
}

/// The goodness of fit of `fit` to `masses` by CSN's semi-parametric bootstrap (section 4.1):
/// each synthetic data set has as many masses as the data; each is drawn, with probability
/// n_tail / n, from the fitted power law above x_min (x_min (1 - u)^(-1/(alpha - 1))) and
/// otherwise uniformly from the data below x_min; it is fitted as the data were (x_min searched
/// again with `search` unless `xmin` is given) and its KS distance compared with the data's.
/// p is the fraction at least as large; CSN rule the power law out when p <= 0.1 (a p above
/// that says the law is plausible, not that it is right). Synthetic set r draws from ChaCha8
/// seeded by `boot.seed` on stream 2^40 + r, so the result does not depend on the thread
/// count. Its precision is about sqrt(p (1 - p) / resamples) (CSN suggest 2,500 resamples for
/// two decimals).
pub fn goodness_of_fit(
    masses: &[f64],
    fit: &PowerLawFit,
    xmin: Option<f64>,
    search: &XminSearch,
    boot: &Bootstrap,
    tick: &(dyn Fn() + Sync),
) -> Result<PowerLawGof, Error> {
    check_values(masses, "masses", true)?;
    if boot.resamples < 2 {
        return Err(Error::usage("a bootstrap needs at least 2 resamples"));
    }
    let data = sorted(masses);
    let n = data.len();
    let below = &data[..data.partition_point(|&x| x < fit.xmin)];
    let p_tail = (n - below.len()) as f64 / n as f64;
    let results: Vec<Option<bool>> = (0..boot.resamples)
        .into_par_iter()
        .map(|r| {
            let mut rng = ChaCha8Rng::seed_from_u64(boot.seed);
            rng.set_stream(GOF_STREAMS + r as u64);
            let mut sample: Vec<f64> = (0..n)
                .map(|_| {
                    if below.is_empty() || rng.random::<f64>() < p_tail {
                        let u: f64 = rng.random();
                        fit.xmin * (1.0 - u).powf(-1.0 / (fit.alpha - 1.0))
                    } else {
                        below[rng.random_range(0..below.len())]
                    }
                })
                .collect();
            sample.sort_by(f64::total_cmp);
            let d = fit_sorted(&sample, xmin, search)
                .ok()
                .map(|f| f.ks_distance >= fit.ks_distance);
            tick();
            d
        })
        .collect();
    let fitted = results.iter().flatten().count();
    let at_least = results.iter().flatten().filter(|&&b| b).count();
    Ok(PowerLawGof {
        p_value: if fitted == 0 {
            f64::NAN
        } else {
            at_least as f64 / fitted as f64
        },
        fitted,
        n_failed: results.len() - fitted,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn draw(alpha: f64, xmin: f64, n: usize, seed: u64) -> Vec<f64> {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        (0..n)
            .map(|_| {
                let u: f64 = rng.random();
                xmin * (1.0 - u).powf(-1.0 / (alpha - 1.0))
            })
            .collect()
    }

    #[test]
    fn closed_form_alpha_on_a_hand_sum() {
        // alpha = 1 + n / sum ln(x/xmin): here sum = ln 2 + ln 4 = 3 ln 2.
        let (alpha, n) = power_law_alpha(&[0.5, 1.0, 2.0, 4.0], 1.0).unwrap();
        assert_eq!(n, 3);
        assert!((alpha - (1.0 + 3.0 / (3.0 * 2f64.ln()))).abs() < 1e-14);
        assert!(power_law_alpha(&[0.5, 1.0], 1.0).is_err());
    }

    #[test]
    fn recovers_a_large_sample_and_its_logarithmic_slope() {
        let data = draw(2.35, 1.0, 20_000, 5);
        let fit = fit_power_law(&data, Some(1.0), &XminSearch::default()).unwrap();
        assert!((fit.alpha - 2.35).abs() < 4.0 * fit.alpha_error);
        assert!((fit.dlogm_slope() + (fit.alpha - 1.0)).abs() == 0.0);
        assert!(fit.ks_distance < 0.02);
    }

    #[test]
    fn search_finds_the_break_above_a_flat_body() {
        // Uniform body on [0.1, 1) below a power-law tail from 1.
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        let mut data = draw(2.3, 1.0, 1500, 11);
        data.extend((0..1500).map(|_| 0.1 + 0.9 * rng.random::<f64>()));
        let fit = fit_power_law(&data, None, &XminSearch::default()).unwrap();
        assert!(fit.xmin_fitted);
        assert!(
            fit.xmin > 0.8 && fit.xmin < 2.0,
            "x_min {} should be near the break at 1",
            fit.xmin
        );
        assert!((fit.alpha - 2.3).abs() < 0.25, "alpha {}", fit.alpha);
    }

    #[test]
    fn candidates_skip_the_largest_values() {
        let data = [1.0, 1.0, 2.0, 3.0, 5.0, 8.0];
        let c = scan_xmin(&data, &XminSearch::default()).unwrap();
        let xs: Vec<f64> = c.iter().map(|c| c.xmin).collect();
        assert_eq!(xs, vec![1.0, 2.0, 3.0]);
        assert_eq!(c[0].n_tail, 6);
        let search = XminSearch {
            min_tail_distinct: 2,
            ..XminSearch::default()
        };
        assert_eq!(scan_xmin(&data, &search).unwrap().len(), 4);
    }

    #[test]
    fn bootstrap_is_seeded_and_thread_count_independent() {
        let data = draw(2.0, 1.0, 300, 3);
        let boot = Bootstrap {
            resamples: 24,
            seed: 42,
        };
        let search = XminSearch::default();
        let one = rayon::ThreadPoolBuilder::new()
            .num_threads(1)
            .build()
            .unwrap()
            .install(|| bootstrap_power_law(&data, None, &search, &boot).unwrap());
        let two = rayon::ThreadPoolBuilder::new()
            .num_threads(2)
            .build()
            .unwrap()
            .install(|| bootstrap_power_law(&data, None, &search, &boot).unwrap());
        assert_eq!(one, two);
        assert_eq!(one.alphas.len() + one.n_failed, 24);
        assert!(one.alpha_std > 0.0 && one.alpha_std < 0.5);
        let other = bootstrap_power_law(
            &data,
            None,
            &search,
            &Bootstrap {
                resamples: 24,
                seed: 43,
            },
        )
        .unwrap();
        assert_ne!(one.alphas, other.alphas);
    }
}

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
//!   alpha above 1.5, which the reference fixtures check. Candidates whose closed-form alpha
//!   is at or above the window's upper end are inadmissible in both (powerlaw's numerical fit
//!   stops at its bound and flags them); when no candidate is admissible, powerlaw 2.0.0 warns
//!   ("No valid values for xmin found") and still returns the candidate of smallest distance
//!   with its alpha held at the bound, whereas cairn returns no fit
//!   ([`NoTail::NoAdmissibleAlpha`]).
//! - Goodness of fit (CSN section 4.1): [`goodness_of_fit`], the semi-parametric bootstrap
//!   p-value of the KS distance.
//! - Bootstrap (CSN section 3.4): the whole sample is resampled with replacement and refitted
//!   (searching x_min again unless it was given); the spread of alpha and x_min over resamples
//!   is their uncertainty. Resample r draws from ChaCha8 seeded by `seed` on stream r, so the
//!   results do not depend on the rayon thread count. The resamples that the window of alpha
//!   held back (searched up to alpha [`ALPHA_CEILING`], they would choose a tail at or above
//!   the window's end) are counted: a window that holds back many narrows the spread.
//!
//! Cost: every candidate's alpha comes from sums of the logarithms made once (O(n) for all
//! candidates), and its KS distance is only worked out as far as needed: a candidate whose
//! distance exceeds the smallest found so far cannot be chosen, and is most often found out at
//! one of the masses where the last candidates stopped; the others are scanned in blocks, the
//! blocks that cannot hold the largest gap passed over. The result is the full scan's to the
//! bit; the work is at most O(n^2) for n distinct masses, and in practice about O(n) (some
//! milliseconds for 50,000 masses, against about ten seconds for the full scan). A given x_min
//! costs O(n).

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

/// Closed-form alpha and KS distance for the tail `tail` (sorted, all >= xmin) above a given
/// x_min. `logs` is scratch space.
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

/// Why no power-law tail was fitted.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum NoTail {
    /// No mass lies above the given x_min.
    NothingAboveXmin,
    /// The masses take fewer distinct values than a search for x_min needs
    /// ([`XminSearch::min_tail_distinct`]).
    TooFewDistinct {
        /// Distinct masses given.
        distinct: usize,
        /// Distinct masses the search needs.
        needed: usize,
    },
    /// Every candidate x_min gives an alpha outside [`XminSearch::alpha_range`].
    NoAdmissibleAlpha {
        /// The least alpha of the candidates (NaN when none is finite): above the range's
        /// upper end, a wider range could admit it; otherwise none can.
        least_alpha: f64,
    },
}

impl NoTail {
    /// The reason and its remedy, in the library's words (x_min as given, or searched with
    /// `search`).
    pub fn message(&self, xmin: Option<f64>, search: &XminSearch) -> String {
        match *self {
            NoTail::NothingAboveXmin => format!(
                "no mass lies above x_min = {}, so no power law can be fitted; choose a smaller x_min",
                xmin.unwrap_or(f64::NAN)
            ),
            NoTail::TooFewDistinct {
                distinct: 1,
                needed,
            } => format!(
                "all masses are equal, so they have no power-law tail (a search for x_min needs at least {needed} distinct masses)"
            ),
            NoTail::TooFewDistinct { distinct, needed } => format!(
                "the masses take only {distinct} distinct values, fewer than the {needed} a search for x_min needs; give x_min"
            ),
            NoTail::NoAdmissibleAlpha { .. } => format!(
                "no candidate x_min gives a power-law exponent between {} and {} (with at least {} distinct masses in the tail); give x_min or widen the admissible range",
                search.alpha_range.0,
                search.alpha_range.1,
                search.min_tail_distinct.max(2)
            ),
        }
    }
}

/// Masses per block of the KS distance's scan ([`Prepared::distance`]).
const BLOCK: usize = 16;

/// How many of the masses where earlier candidates stopped are tried first by the search
/// ([`Prepared::best`]); beyond a few, more find out hardly any more candidates.
const WITNESSES: usize = 8;

/// How far below the largest gap found a block's bound must lie for the block to be passed
/// over: far above the rounding of F (about 1e-16), far below any distance that matters.
const GAP_MARGIN: f64 = 1e-12;

/// `a + b` and its rounding error (Knuth's two-sum).
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    (s, (a - (s - bb)) + (b - bb))
}

/// A sorted sample prepared for the x_min search: the logarithm of each mass, the first index
/// of each distinct mass, and the sum of the logarithms from each of those indices to the end,
/// kept as a sum and its rounding error (compensated summation), so that each candidate's
/// sum of ln(x / x_min) over its tail is that sum less n ln x_min (the product split exactly
/// by a fused multiply-add): one pass over the sample for every candidate's alpha, exact to
/// the rounding of the logarithms even where the two terms nearly cancel (each logarithm is
/// rounded to about 2e-16 |ln x|, so alpha's relative error is at most about (alpha - 1) times
/// that: below 1e-13 for the admissible alphas, up to 10, of masses within e^50 of 1).
struct Prepared<'a> {
    s: &'a [f64],
    logs: Vec<f64>,
    starts: Vec<usize>,
    sums: Vec<(f64, f64)>,
}

impl<'a> Prepared<'a> {
    fn new(s: &'a [f64]) -> Self {
        let logs: Vec<f64> = s.iter().map(|x| x.ln()).collect();
        let starts: Vec<usize> = (0..s.len())
            .filter(|&i| i == 0 || s[i] != s[i - 1])
            .collect();
        let mut sums = vec![(0.0, 0.0); starts.len()];
        let (mut hi, mut lo) = (0.0f64, 0.0f64);
        let mut j = s.len();
        for (k, &start) in starts.iter().enumerate().rev() {
            while j > start {
                j -= 1;
                let (t, e) = two_sum(hi, logs[j]);
                hi = t;
                lo += e;
            }
            sums[k] = (hi, lo);
        }
        Prepared {
            s,
            logs,
            starts,
            sums,
        }
    }

    /// Candidates: every distinct mass but the largest `min_tail_distinct - 1`.
    fn candidates(&self, search: &XminSearch) -> usize {
        self.starts
            .len()
            .saturating_sub(search.min_tail_distinct.max(2) - 1)
    }

    /// The closed-form alpha of candidate `k` (CSN eq. 3.1) and its tail size.
    fn alpha(&self, k: usize) -> (f64, usize) {
        let i = self.starts[k];
        let n = self.s.len() - i;
        let (hi, lo) = self.sums[k];
        let nf = n as f64;
        let p = nf * self.logs[i];
        let pe = nf.mul_add(self.logs[i], -p);
        let sum = (hi - p) + (lo - pe);
        (1.0 + nf / sum, n)
    }

    /// The KS distance of candidate `k`'s tail to its law with exponent `alpha` (see the module
    /// documentation), or, as soon as it exceeds `bound`, the index of the mass where it did.
    ///
    /// The distance is the largest gap |F(u) - S(u)| over the tail's distinct masses u, and a
    /// maximum does not depend on the order it is taken in, so the masses are visited in the
    /// order that finds it soonest: the masses at the indices `first` (where earlier candidates
    /// stopped), then blocks of [`BLOCK`] masses, the block that may hold the largest gap first.
    /// F and S both rise with the mass, so no gap inside a block exceeds F at the next block's
    /// first mass less S at its own first mass, nor S at its last mass less F at its first;
    /// a block whose bound lies [`GAP_MARGIN`] below the largest gap found cannot change the
    /// maximum and is passed over (the margin covers the rounding of F, which may break its
    /// rise by an ulp). The result is the distance of every gap taken in order, to the bit.
    /// `bounds` is scratch space.
    fn distance(
        &self,
        k: usize,
        alpha: f64,
        bound: f64,
        first: &[usize],
        bounds: &mut Vec<f64>,
    ) -> Result<f64, usize> {
        let i = self.starts[k];
        let tail = &self.starts[k..];
        let n = (self.s.len() - i) as f64;
        let (li, e) = (self.logs[i], 1.0 - alpha);
        let model = |j: usize| 1.0 - (e * (self.logs[j] - li)).exp();
        let empirical = |j: usize| (j - i) as f64 / n;
        let gap = |j: usize| (model(j) - empirical(j)).abs();
        // Only the first index of a distinct mass is a step of the empirical distribution.
        for &j in first {
            if j > i && j < self.s.len() && self.s[j] != self.s[j - 1] && gap(j) > bound {
                return Err(j);
            }
        }
        let scan = |js: &[usize], d: &mut f64| -> Result<(), usize> {
            for &j in js {
                *d = d.max(gap(j));
                if *d > bound {
                    return Err(j);
                }
            }
            Ok(())
        };
        let mut d: f64 = 0.0;
        let blocks = tail.len().div_ceil(BLOCK);
        if blocks < 4 {
            scan(tail, &mut d)?;
            return Ok(d);
        }
        // F at each block's first mass, then each block's bound.
        bounds.clear();
        bounds.extend(tail.iter().step_by(BLOCK).map(|&j| model(j)));
        for b in 0..blocks {
            let block = &tail[b * BLOCK..((b + 1) * BLOCK).min(tail.len())];
            let f_next = bounds.get(b + 1).copied().unwrap_or(1.0);
            let (lo, hi) = (block[0], block[block.len() - 1]);
            let over = f_next - empirical(lo);
            let under = empirical(hi) - bounds[b];
            bounds[b] = over.max(under);
        }
        let top = (0..blocks)
            .max_by(|&a, &b| bounds[a].total_cmp(&bounds[b]))
            .unwrap_or(0);
        let block = |b: usize| &tail[b * BLOCK..((b + 1) * BLOCK).min(tail.len())];
        scan(block(top), &mut d)?;
        for b in (0..blocks).filter(|&b| b != top) {
            if bounds[b] + GAP_MARGIN >= d {
                scan(block(b), &mut d)?;
            }
        }
        Ok(d)
    }

    fn admissible(alpha: f64, d: f64, search: &XminSearch) -> bool {
        let (lo, hi) = search.alpha_range;
        alpha.is_finite() && alpha > lo && alpha < hi && d.is_finite()
    }

    /// Every candidate with its fit, in increasing x_min.
    fn scan(&self, search: &XminSearch) -> Vec<XminCandidate> {
        (0..self.candidates(search))
            .into_par_iter()
            .map_init(Vec::new, |bounds, k| {
                let (alpha, n_tail) = self.alpha(k);
                let d = self
                    .distance(k, alpha, f64::INFINITY, &[], bounds)
                    .unwrap_or(f64::NAN);
                XminCandidate {
                    xmin: self.s[self.starts[k]],
                    alpha,
                    n_tail,
                    ks_distance: d,
                    admissible: Self::admissible(alpha, d, search),
                }
            })
            .collect()
    }

    /// The admissible candidate with the smallest KS distance (the first on exact ties): the
    /// one [`Prepared::scan`] would give, found without computing every distance in full.
    /// A candidate's distance is a maximum over its tail, so once its running maximum exceeds
    /// the smallest distance found so far it cannot win and its scan stops; alpha, from the
    /// sums, rules out inadmissible candidates before any scan. The distances that are
    /// completed are the scan's to the bit, and a stopped candidate's distance exceeds a
    /// completed one, so the winner is the scan's whatever the order and thread count. A few
    /// candidates spread over the range are done first, then the rest nearest the best of
    /// those first, so that the bound is tight early; each candidate first tries the masses
    /// where the last few candidates stopped.
    fn best(&self, search: &XminSearch) -> Result<XminCandidate, NoTail> {
        use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};
        let keep = self.candidates(search);
        if keep == 0 {
            return Err(NoTail::TooFewDistinct {
                distinct: self.starts.len(),
                needed: search.min_tail_distinct.max(2),
            });
        }
        // Distances are never negative, so their bit patterns order as their values do.
        let bound = AtomicU64::new(f64::INFINITY.to_bits());
        // Where the last candidates stopped (a ring of them): neighbouring candidates tend to
        // depart from their laws at the same masses, so a candidate that cannot win is most
        // often found out at one of them, before any scan.
        let witnesses: [AtomicUsize; WITNESSES] = std::array::from_fn(|_| AtomicUsize::new(0));
        let next = AtomicUsize::new(0);
        let evaluate = |bounds: &mut Vec<f64>, k: usize| -> Option<(usize, f64, usize, f64)> {
            let (alpha, n_tail) = self.alpha(k);
            if !Self::admissible(alpha, 0.0, search) {
                return None;
            }
            let limit = f64::from_bits(bound.load(Ordering::Relaxed));
            let first: [usize; WITNESSES] =
                std::array::from_fn(|w| witnesses[w].load(Ordering::Relaxed));
            let d = match self.distance(k, alpha, limit, &first, bounds) {
                Ok(d) => d,
                Err(j) => {
                    if !first.contains(&j) {
                        let w = next.fetch_add(1, Ordering::Relaxed) % WITNESSES;
                        witnesses[w].store(j, Ordering::Relaxed);
                    }
                    return None;
                }
            };
            if !d.is_finite() {
                return None;
            }
            bound.fetch_min(d.to_bits(), Ordering::Relaxed);
            Some((k, alpha, n_tail, d))
        };
        let probe_step = keep.div_ceil(32);
        let probes: Vec<(usize, f64, usize, f64)> = (0..keep)
            .into_par_iter()
            .step_by(probe_step)
            .map_init(Vec::new, evaluate)
            .flatten()
            .collect();
        let centre = probes
            .iter()
            .min_by(|a, b| a.3.total_cmp(&b.3))
            .map_or(0, |p| p.0);
        let mut order: Vec<usize> = (0..keep).collect();
        order.sort_by_key(|&k| k.abs_diff(centre));
        let done: Vec<(usize, f64, usize, f64)> = order
            .into_par_iter()
            .map_init(Vec::new, evaluate)
            .flatten()
            .collect();
        done.into_iter()
            .min_by(|a, b| a.3.total_cmp(&b.3).then(a.0.cmp(&b.0)))
            .map(|(k, alpha, n_tail, d)| XminCandidate {
                xmin: self.s[self.starts[k]],
                alpha,
                n_tail,
                ks_distance: d,
                admissible: true,
            })
            .ok_or_else(|| NoTail::NoAdmissibleAlpha {
                least_alpha: (0..keep)
                    .map(|k| self.alpha(k).0)
                    .filter(|a| a.is_finite())
                    .fold(f64::NAN, f64::min),
            })
    }
}

/// Maximum-likelihood alpha for masses >= xmin, and the tail size (CSN eq. 3.1).
pub fn power_law_alpha(masses: &[f64], xmin: f64) -> Result<(f64, usize), Error> {
    let fit = fit_power_law(masses, Some(xmin), &XminSearch::default())?;
    Ok((fit.alpha, fit.n_tail))
}

/// The fit for every candidate x_min (see the module documentation), in increasing x_min.
pub fn scan_xmin(masses: &[f64], search: &XminSearch) -> Result<Vec<XminCandidate>, Error> {
    check_values(masses, "masses", true)?;
    let s = sorted(masses);
    Ok(Prepared::new(&s).scan(search))
}

/// Refuses an x_min that is not a positive mass.
fn check_xmin(xmin: Option<f64>) -> Result<(), Error> {
    match xmin {
        Some(x) if !(x.is_finite() && x > 0.0) => Err(Error::usage(format!(
            "the power-law x_min must be a positive mass, not {x}"
        ))),
        _ => Ok(()),
    }
}

/// The fit of the sorted masses `s` above `xmin` (positive), or above the x_min searched for.
fn fit_sorted(s: &[f64], xmin: Option<f64>, search: &XminSearch) -> Result<PowerLawFit, NoTail> {
    let n_total = s.len();
    let (alpha, xmin, n_tail, d, fitted) = match xmin {
        Some(xmin) => {
            let i = s.partition_point(|&x| x < xmin);
            let tail = &s[i..];
            if !tail.iter().any(|&x| x > xmin) {
                return Err(NoTail::NothingAboveXmin);
            }
            let (alpha, d) = fit_tail(tail, xmin, &mut Vec::new());
            (alpha, xmin, tail.len(), d, false)
        }
        None => {
            let best = Prepared::new(s).best(search)?;
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
    try_fit_power_law(masses, xmin, search)?.map_err(|why| Error::usage(why.message(xmin, search)))
}

/// [`fit_power_law`], with the reason when the masses have no tail to fit kept apart from the
/// errors of input (masses or x_min that are not positive).
pub fn try_fit_power_law(
    masses: &[f64],
    xmin: Option<f64>,
    search: &XminSearch,
) -> Result<Result<PowerLawFit, NoTail>, Error> {
    check_values(masses, "masses", true)?;
    check_xmin(xmin)?;
    Ok(fit_sorted(&sorted(masses), xmin, search))
}

/// Resamples or synthetic sets without a tail, by reason (left out of a bootstrap).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct TailFailures {
    /// No mass above the given x_min.
    pub nothing_above_xmin: usize,
    /// Too few distinct masses for the search.
    pub too_few_distinct: usize,
    /// No candidate with an admissible alpha.
    pub no_admissible_alpha: usize,
}

impl TailFailures {
    fn count<'a>(reasons: impl Iterator<Item = &'a NoTail>) -> Self {
        let mut f = TailFailures::default();
        for r in reasons {
            match r {
                NoTail::NothingAboveXmin => f.nothing_above_xmin += 1,
                NoTail::TooFewDistinct { .. } => f.too_few_distinct += 1,
                NoTail::NoAdmissibleAlpha { .. } => f.no_admissible_alpha += 1,
            }
        }
        f
    }

    /// All of them.
    pub fn total(&self) -> usize {
        self.nothing_above_xmin + self.too_few_distinct + self.no_admissible_alpha
    }
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
    /// Resamples without a tail (left out).
    pub n_failed: usize,
    /// Those resamples by reason.
    pub failures: TailFailures,
    /// Standard deviation of alpha over resamples (n - 1 in the denominator).
    pub alpha_std: f64,
    /// Standard deviation of x_min over resamples.
    pub xmin_std: f64,
    /// 16th, 50th and 84th percentiles of alpha.
    pub alpha_percentiles: [f64; 3],
    /// 16th, 50th and 84th percentiles of x_min.
    pub xmin_percentiles: [f64; 3],
    /// Resamples with a tail whose search was held back by the window: searched again with
    /// the window widened to [`ALPHA_CEILING`], they would choose a tail with alpha at or above
    /// the window's upper end, and so took another lower mass inside it.
    /// Their share is how far the window narrows the spread. 0 when x_min is given or the
    /// window already reaches [`ALPHA_CEILING`].
    pub window_limited: usize,
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

/// The widest window of alpha whose upper end a search is compared with, to tell the resamples
/// whose choice the window held back ([`PowerLawBootstrap::window_limited`]); compare's largest
/// `--alpha-max`.
pub const ALPHA_CEILING: f64 = 10.0;

/// The fit of one sorted resample `s` as [`fit_sorted`] gives it, and whether the window held
/// it back: whether the search with the window's upper end raised to [`ALPHA_CEILING`] chooses
/// a tail with alpha at or above the window's own end while the window's search finds a tail.
///
/// The wider search is made first: when its winner's alpha lies inside the window, that winner
/// is the window's too (it has the smallest distance, and the first on ties, among candidates
/// that include all the window's), so only resamples it takes outside the window are searched
/// a second time; a wider search that finds no tail leaves none for the window either.
fn fit_resample(
    s: &[f64],
    xmin: Option<f64>,
    search: &XminSearch,
) -> (Result<PowerLawFit, NoTail>, bool) {
    let (lo, hi) = search.alpha_range;
    if xmin.is_some() || hi >= ALPHA_CEILING {
        return (fit_sorted(s, xmin, search), false);
    }
    let wide = XminSearch {
        alpha_range: (lo, ALPHA_CEILING),
        ..*search
    };
    match fit_sorted(s, None, &wide) {
        Ok(f) if f.alpha < hi => (Ok(f), false),
        Ok(_) => {
            let fit = fit_sorted(s, None, search);
            let limited = fit.is_ok();
            (fit, limited)
        }
        Err(why) => (Err(why), false),
    }
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
    check_xmin(xmin)?;
    if boot.resamples < 2 {
        return Err(Error::usage("a bootstrap needs at least 2 resamples"));
    }
    let n = masses.len();
    // Each resample's (alpha, x_min) or why it has no tail, and whether the window held it back.
    type Resampled = (Result<(f64, f64), NoTail>, bool);
    let results: Vec<Resampled> = (0..boot.resamples)
        .into_par_iter()
        .map(|r| {
            let mut rng = ChaCha8Rng::seed_from_u64(boot.seed);
            rng.set_stream(r as u64);
            let mut sample: Vec<f64> = (0..n).map(|_| masses[rng.random_range(0..n)]).collect();
            sample.sort_by(f64::total_cmp);
            let (fit, limited) = fit_resample(&sample, xmin, search);
            tick();
            (fit.map(|f| (f.alpha, f.xmin)), limited)
        })
        .collect();
    let window_limited = results.iter().filter(|r| r.1).count();
    let results: Vec<Result<(f64, f64), NoTail>> = results.into_iter().map(|r| r.0).collect();
    let (alphas, xmins): (Vec<f64>, Vec<f64>) = results.iter().flatten().copied().unzip();
    Ok(PowerLawBootstrap {
        window_limited,
        n_failed: results.len() - alphas.len(),
        failures: TailFailures::count(results.iter().filter_map(|r| r.as_ref().err())),
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
    /// Synthetic data sets without a tail (left out).
    pub n_failed: usize,
    /// Those sets by reason.
    pub failures: TailFailures,
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
    check_xmin(xmin)?;
    if boot.resamples < 2 {
        return Err(Error::usage("a bootstrap needs at least 2 resamples"));
    }
    let data = sorted(masses);
    let n = data.len();
    let below = &data[..data.partition_point(|&x| x < fit.xmin)];
    let p_tail = (n - below.len()) as f64 / n as f64;
    let results: Vec<Result<bool, NoTail>> = (0..boot.resamples)
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
            let d = fit_sorted(&sample, xmin, search).map(|f| f.ks_distance >= fit.ks_distance);
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
        failures: TailFailures::count(results.iter().filter_map(|r| r.as_ref().err())),
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

    /// The search stops scanning a candidate once it cannot win; it must choose what the full
    /// scan chooses (the admissible candidate with the smallest distance, the first on exact
    /// ties), with the scan's own alpha and distance to the bit, on samples of many shapes:
    /// pure power laws, a log-normal body below a tail, masses rounded to few digits (ties),
    /// tiny samples, narrow and wide alpha windows, several tail minima, one and two threads.
    #[test]
    fn the_search_chooses_what_the_full_scan_chooses() {
        let mut checked = 0;
        for seed in 0..60u64 {
            let mut rng = ChaCha8Rng::seed_from_u64(1000 + seed);
            let n = [5, 12, 40, 150, 600, 6000][seed as usize % 6];
            let mut data = draw(1.6 + 0.03 * seed as f64, 0.5, n, seed);
            if seed % 3 == 1 {
                // A log-normal-like body (a product of uniforms) below the tail.
                data.extend((0..n).map(|_| {
                    0.5 * (0.2 + rng.random::<f64>()) * (0.2 + rng.random::<f64>()) * 2.0
                }));
            }
            if seed % 4 == 2 {
                for x in &mut data {
                    *x = (*x * 100.0).round().max(1.0) / 100.0;
                }
            }
            let search = XminSearch {
                min_tail_distinct: 2 + seed as usize % 3,
                alpha_range: (1.0, [3.0, 2.2, 10.0][seed as usize % 3]),
            };
            let scan = scan_xmin(&data, &search).unwrap();
            let want =
                scan.iter()
                    .filter(|c| c.admissible)
                    .fold(None::<&XminCandidate>, |best, c| match best {
                        Some(b) if b.ks_distance <= c.ks_distance => Some(b),
                        _ => Some(c),
                    });
            for threads in [1, 2] {
                let got = rayon::ThreadPoolBuilder::new()
                    .num_threads(threads)
                    .build()
                    .unwrap()
                    .install(|| try_fit_power_law(&data, None, &search).unwrap());
                match (want, got) {
                    (Some(w), Ok(g)) => {
                        assert_eq!(
                            (g.xmin, g.n_tail, g.alpha.to_bits(), g.ks_distance.to_bits()),
                            (w.xmin, w.n_tail, w.alpha.to_bits(), w.ks_distance.to_bits()),
                            "seed {seed}"
                        );
                        checked += 1;
                    }
                    (None, Err(why)) => {
                        let expected = if scan.is_empty() {
                            "too few distinct"
                        } else {
                            "no admissible"
                        };
                        let said = match why {
                            NoTail::TooFewDistinct { .. } => "too few distinct",
                            NoTail::NoAdmissibleAlpha { .. } => "no admissible",
                            NoTail::NothingAboveXmin => "nothing above",
                        };
                        assert_eq!(said, expected, "seed {seed}");
                    }
                    (w, g) => panic!("seed {seed}: scan {w:?}, search {g:?}"),
                }
            }
        }
        assert!(checked > 80, "only {checked} searches found a tail");
    }

    /// The distance taken in blocks, the blocks that cannot hold the largest gap passed over,
    /// is the maximum of every gap |F(u) - S(u)| taken in order (the module's definition), to
    /// the bit, for every candidate of samples with and without ties, large enough for many
    /// blocks; and a bound below it stops the scan at a mass whose gap exceeds the bound.
    #[test]
    fn the_blocked_distance_is_the_plain_maximum() {
        let mut checked = 0;
        for seed in 0..6u64 {
            let mut data = draw(1.7 + 0.2 * seed as f64, 1.0, 3000, 40 + seed);
            if seed % 2 == 1 {
                for x in &mut data {
                    *x = (*x * 20.0).round() / 20.0;
                }
            }
            let s = sorted(&data);
            let p = Prepared::new(&s);
            let mut scratch = Vec::new();
            for k in 0..p.candidates(&XminSearch::default()) {
                let (alpha, _) = p.alpha(k);
                let i = p.starts[k];
                let n = (s.len() - i) as f64;
                let plain = p.starts[k..].iter().fold(0.0f64, |d, &j| {
                    let model = 1.0 - ((1.0 - alpha) * (p.logs[j] - p.logs[i])).exp();
                    d.max((model - (j - i) as f64 / n).abs())
                });
                let blocked = p.distance(k, alpha, f64::INFINITY, &[], &mut scratch);
                assert_eq!(
                    blocked.map(f64::to_bits),
                    Ok(plain.to_bits()),
                    "seed {seed}, {k}"
                );
                if let Err(j) = p.distance(k, alpha, 0.5 * plain, &[], &mut scratch) {
                    let model = 1.0 - ((1.0 - alpha) * (p.logs[j] - p.logs[i])).exp();
                    assert!((model - (j - i) as f64 / n).abs() > 0.5 * plain);
                } else {
                    assert_eq!(plain, 0.0, "seed {seed}, {k}: not stopped");
                }
                checked += 1;
            }
        }
        assert!(checked > 9_000, "{checked} candidates");
    }

    /// Each candidate's alpha from the compensated sums of logarithms agrees with the closed
    /// form summed directly, 1 + n / sum ln(x / x_min) (CSN eq. 3.1), to 1e-12 relative
    /// wherever alpha could be admitted (up to 10, the widest window compare allows), here on
    /// large masses whose logarithms nearly cancel in the narrow tails at the top. Each
    /// logarithm is rounded to about 2e-16 |ln x|, so the sum's error is at most about n times
    /// that, and alpha's relative error (alpha - 1) times that over n: below 1e-13 for
    /// alpha <= 10 and |ln x| < 50. Far steeper candidates (inadmissible) may differ more.
    #[test]
    fn alpha_from_sums_matches_the_direct_sum() {
        let mut data = draw(2.35, 1.0e4, 3000, 17);
        data.extend((0..50).map(|k| 5.0e6 * (1.0 + 0.01 * k as f64)));
        let s = sorted(&data);
        let p = Prepared::new(&s);
        let mut compared = 0;
        for k in 0..p.candidates(&XminSearch::default()) {
            let (alpha, n) = p.alpha(k);
            let tail = &s[p.starts[k]..];
            let direct = 1.0 + n as f64 / tail.iter().map(|x| (x / tail[0]).ln()).sum::<f64>();
            if direct <= 10.0 {
                assert!(
                    (alpha - direct).abs() <= 1e-12 * direct,
                    "candidate {k}: {alpha} against {direct}"
                );
                compared += 1;
            }
        }
        assert!(compared > 3000, "{compared} candidates compared");
    }

    /// The bootstrap's fits are those of each resample searched in the window alone (the wider
    /// search made first changes none of them), and the resamples counted as held back by the
    /// window are exactly those whose search up to alpha 10 chooses a tail at or above the
    /// window's end while the window's search finds one: many on a steep tail (alpha 2.8 on 60
    /// masses, near the default window's end of 3), few on a shallow one (alpha 2.0 on 300),
    /// none with x_min given or with the window already reaching alpha 10.
    #[test]
    fn resamples_held_back_by_the_window_are_counted() {
        let boot = Bootstrap {
            resamples: 200,
            seed: 7,
        };
        let narrow = XminSearch::default();
        let wide = XminSearch {
            alpha_range: (1.0, ALPHA_CEILING),
            ..narrow
        };
        let mut shares = vec![];
        for (alpha, n, seed) in [(2.8, 60, 11), (2.0, 300, 12)] {
            let data = draw(alpha, 1.0, n, seed);
            let b = bootstrap_power_law(&data, None, &narrow, &boot).unwrap();
            let n = data.len();
            let (mut alphas, mut limited) = (vec![], 0);
            for r in 0..boot.resamples {
                let mut rng = ChaCha8Rng::seed_from_u64(boot.seed);
                rng.set_stream(r as u64);
                let mut sample: Vec<f64> = (0..n).map(|_| data[rng.random_range(0..n)]).collect();
                sample.sort_by(f64::total_cmp);
                let own = fit_sorted(&sample, None, &narrow);
                if let Ok(f) = &own {
                    alphas.push(f.alpha);
                    if fit_sorted(&sample, None, &wide).is_ok_and(|w| w.alpha >= 3.0) {
                        limited += 1;
                    }
                }
            }
            assert_eq!(b.alphas, alphas);
            assert_eq!(b.window_limited, limited);
            shares.push(limited as f64 / boot.resamples as f64);
            let fixed = bootstrap_power_law(&data, Some(1.0), &narrow, &boot).unwrap();
            assert_eq!(fixed.window_limited, 0);
            let widest = bootstrap_power_law(&data, None, &wide, &boot).unwrap();
            assert_eq!(widest.window_limited, 0);
        }
        assert!(shares[0] > 0.1, "steep tail: {shares:?}");
        assert!(shares[1] < 0.05, "shallow tail: {shares:?}");
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

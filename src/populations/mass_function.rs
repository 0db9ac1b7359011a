//! Differential mass function dN/dlog10 M in logarithmic bins, with Poisson errors, and the
//! cumulative number N(>= M).
//!
//! Errors on a bin with N members: the symmetric sqrt(N), and the approximate one-sided 84.13%
//! ("1 sigma") Poisson confidence limits of Gehrels 1986 (ApJ 303, 336), equation 7 for the
//! upper limit, lambda_u = N + sqrt(N + 3/4) + 1, and equation 12 for the lower limit,
//! lambda_l = N (1 - 1/(9N) - 1/(3 sqrt N))^3 (0 for N = 0), both with S = 1. Gehrels gives
//! their accuracy as about 1-2% for small N; they tend to the exact limits as N grows. All
//! counts and limits are divided by the bin width in dex to give dN/dlog10 M.

use super::{check_values, sorted};
use crate::error::Error;

/// How the logarithmic bins are chosen.
#[derive(Debug, Clone, PartialEq)]
pub enum Binning {
    /// Bins of this width in log10 M, with edges at integer multiples of the width (so that
    /// bins of different populations line up): the first bin holds the smallest mass, the last
    /// the largest. A mass on an edge belongs to the bin above it.
    WidthDex(f64),
    /// Given mass edges, strictly increasing. Bins are [lo, hi) except the last, [lo, hi];
    /// masses outside are counted in [`MassFunction::n_outside`].
    Edges(Vec<f64>),
}

/// Approximate 84.13% Poisson confidence limits on a count (Gehrels 1986, equations 7, 12).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GehrelsLimits {
    /// Lower limit lambda_l on the mean (0 for a count of 0).
    pub lower: f64,
    /// Upper limit lambda_u on the mean.
    pub upper: f64,
}

/// The Gehrels 1986 approximate one-sided 84.13% limits (S = 1) for a count `n`.
pub fn gehrels_limits(n: u64) -> GehrelsLimits {
    let x = n as f64;
    let upper = x + (x + 0.75).sqrt() + 1.0;
    let lower = if n == 0 {
        0.0
    } else {
        x * (1.0 - 1.0 / (9.0 * x) - 1.0 / (3.0 * x.sqrt())).powi(3)
    };
    GehrelsLimits { lower, upper }
}

/// One bin of a mass function.
#[derive(Debug, Clone, PartialEq)]
pub struct MassFunctionBin {
    /// Lower mass edge.
    pub lo: f64,
    /// Upper mass edge.
    pub hi: f64,
    /// Geometric centre sqrt(lo hi).
    pub center: f64,
    /// Width in dex, log10(hi / lo).
    pub width_dex: f64,
    /// Number of masses in the bin.
    pub count: u64,
    /// dN/dlog10 M = count / width_dex.
    pub dn_dlogm: f64,
    /// Poisson error sqrt(count) / width_dex.
    pub error: f64,
    /// Gehrels lower 84.13% limit on dN/dlog10 M.
    pub lower_limit: f64,
    /// Gehrels upper 84.13% limit on dN/dlog10 M.
    pub upper_limit: f64,
}

/// A binned differential mass function.
#[derive(Debug, Clone, PartialEq)]
pub struct MassFunction {
    /// The bins in increasing mass.
    pub bins: Vec<MassFunctionBin>,
    /// Number of masses given.
    pub n_total: usize,
    /// Number of masses outside the given edges (always 0 for [`Binning::WidthDex`]).
    pub n_outside: usize,
}

fn make_bin(lo: f64, hi: f64, count: u64) -> MassFunctionBin {
    let width_dex = (hi / lo).log10();
    let g = gehrels_limits(count);
    MassFunctionBin {
        lo,
        hi,
        center: (lo * hi).sqrt(),
        width_dex,
        count,
        dn_dlogm: count as f64 / width_dex,
        error: (count as f64).sqrt() / width_dex,
        lower_limit: g.lower / width_dex,
        upper_limit: g.upper / width_dex,
    }
}

/// The most bins a width may make (a million bins of a mass function is already no plot).
const MAX_BINS: i64 = 1_000_000;

/// Bins positive, finite masses into dN/dlog10 M.
pub fn mass_function(masses: &[f64], binning: &Binning) -> Result<MassFunction, Error> {
    check_values(masses, "masses", true)?;
    match binning {
        Binning::WidthDex(w) => {
            if !(w.is_finite() && *w > 0.0) {
                return Err(Error::usage(format!(
                    "the mass-function bin width must be a positive number of dex, not {w}"
                )));
            }
            // Bin index k holds log10 M in [k w, (k + 1) w); the same formula assigns the
            // masses and makes the edges, so they always agree.
            let index = |m: f64| (m.log10() / w).floor() as i64;
            let s = sorted(masses);
            let k0 = index(s[0]);
            let k1 = index(s[s.len() - 1]);
            // Counted in f64 too: the indices saturate for absurdly narrow bins.
            let span = (s[s.len() - 1].log10() - s[0].log10()) / w;
            if span >= MAX_BINS as f64 || k1.checked_sub(k0).is_none_or(|d| d >= MAX_BINS) {
                return Err(Error::usage(format!(
                    "a mass-function bin width of {w} dex makes more than {MAX_BINS} bins over \
                     the masses' range ({:e} to {:e}); give a wider bin",
                    s[0],
                    s[s.len() - 1]
                )));
            }
            let mut counts = vec![0u64; (k1 - k0 + 1) as usize];
            for &m in &s {
                counts[(index(m) - k0) as usize] += 1;
            }
            let edge = |k: i64| 10f64.powf(k as f64 * w);
            let bins = counts
                .iter()
                .enumerate()
                .map(|(i, &c)| make_bin(edge(k0 + i as i64), edge(k0 + i as i64 + 1), c))
                .collect();
            Ok(MassFunction {
                bins,
                n_total: masses.len(),
                n_outside: 0,
            })
        }
        Binning::Edges(edges) => {
            if edges.len() < 2
                || edges.iter().any(|e| !(e.is_finite() && *e > 0.0))
                || edges.windows(2).any(|p| p[1] <= p[0])
            {
                return Err(Error::usage(
                    "mass-function bin edges must be at least two positive masses in strictly \
                     increasing order",
                ));
            }
            let nb = edges.len() - 1;
            let mut counts = vec![0u64; nb];
            let mut outside = 0;
            for &m in masses {
                if m < edges[0] || m > edges[nb] {
                    outside += 1;
                    continue;
                }
                // Index of the last edge <= m, capped so the top edge falls in the last bin.
                let i = edges
                    .partition_point(|&e| e <= m)
                    .saturating_sub(1)
                    .min(nb - 1);
                counts[i] += 1;
            }
            let bins = (0..nb)
                .map(|i| make_bin(edges[i], edges[i + 1], counts[i]))
                .collect();
            Ok(MassFunction {
                bins,
                n_total: masses.len(),
                n_outside: outside,
            })
        }
    }
}

/// The cumulative mass function: for each distinct mass M (increasing), the number of masses
/// greater than or equal to M, N(>= M), the usual step plot of a cumulative mass function.
pub fn cumulative_counts(masses: &[f64]) -> Result<Vec<(f64, usize)>, Error> {
    check_values(masses, "masses", true)?;
    let s = sorted(masses);
    let n = s.len();
    let mut out: Vec<(f64, usize)> = Vec::new();
    for (i, &m) in s.iter().enumerate() {
        if out.last().is_none_or(|&(prev, _)| prev != m) {
            out.push((m, n - i));
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Poisson P(X <= n; lambda), summed directly (small n only).
    fn poisson_cdf(n: u64, lambda: f64) -> f64 {
        let mut term = (-lambda).exp();
        let mut sum = term;
        for k in 1..=n {
            term *= lambda / k as f64;
            sum += term;
        }
        sum
    }

    /// Solves f(lambda) = target for a monotone f by bisection on [lo, hi].
    fn solve(f: impl Fn(f64) -> f64, target: f64, mut lo: f64, mut hi: f64) -> f64 {
        let rising = f(hi) > f(lo);
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if (f(mid) < target) == rising {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        0.5 * (lo + hi)
    }

    #[test]
    fn gehrels_limits_close_to_exact_poisson_limits() {
        // Self-consistency, not an outside reference: the exact one-sided 84.13% limits solve
        // P(X <= n; lambda_u) = 1 - CL and P(X >= n; lambda_l) = 1 - CL (Gehrels 1986, eqs 1-2);
        // his approximations (eqs 7, 12) are stated good to a few per cent at small n.
        let cl = 0.841_344_746_068_543; // Phi(1)
        for n in 0..=30u64 {
            let g = gehrels_limits(n);
            let up = solve(|l| poisson_cdf(n, l), 1.0 - cl, 0.0, 100.0);
            assert!(
                (g.upper - up).abs() / up < 0.015,
                "n {n}: upper {} vs exact {up}",
                g.upper
            );
            if n >= 1 {
                let lo = solve(|l| 1.0 - poisson_cdf(n - 1, l), 1.0 - cl, 0.0, 100.0);
                assert!(
                    (g.lower - lo).abs() / lo < 0.02,
                    "n {n}: lower {} vs exact {lo}",
                    g.lower
                );
            } else {
                assert_eq!(g.lower, 0.0);
            }
        }
    }

    #[test]
    fn width_binning_aligns_edges_and_counts_everything() {
        let masses = [0.11, 0.15, 0.2, 0.5, 0.9, 1.0, 1.2, 3.0, 9.5];
        let mf = mass_function(&masses, &Binning::WidthDex(0.5)).unwrap();
        let total: u64 = mf.bins.iter().map(|b| b.count).sum();
        assert_eq!(total, masses.len() as u64);
        assert_eq!(mf.n_outside, 0);
        // Edges at 10^-1, 10^-0.5, 10^0, 10^0.5, 10^1.
        assert_eq!(mf.bins.len(), 4);
        assert!((mf.bins[0].lo - 0.1).abs() < 1e-15);
        assert!((mf.bins[3].hi - 10.0).abs() < 1e-12);
        let counts: Vec<u64> = mf.bins.iter().map(|b| b.count).collect();
        // 1.0 sits on an edge and goes to the bin above it.
        assert_eq!(counts, vec![3, 2, 3, 1]);
        let b = &mf.bins[0];
        assert!((b.dn_dlogm - 6.0).abs() < 1e-12);
        assert!((b.error - 3f64.sqrt() * 2.0).abs() < 1e-12);
        assert!(b.lower_limit < b.dn_dlogm && b.upper_limit > b.dn_dlogm + b.error);
    }

    #[test]
    fn given_edges_count_outside_and_close_last_bin() {
        let masses = [0.05, 0.1, 0.5, 1.0, 2.0, 4.0, 5.0];
        let mf = mass_function(&masses, &Binning::Edges(vec![0.1, 1.0, 4.0])).unwrap();
        let counts: Vec<u64> = mf.bins.iter().map(|b| b.count).collect();
        assert_eq!(counts, vec![2, 3]);
        assert_eq!(mf.n_outside, 2);
        assert!(mass_function(&masses, &Binning::Edges(vec![1.0, 0.5])).is_err());
        assert!(mass_function(&masses, &Binning::WidthDex(0.0)).is_err());
        assert!(mass_function(&[1.0, -2.0], &Binning::WidthDex(0.1)).is_err());
    }

    #[test]
    fn cumulative_counts_steps_down_with_ties() {
        let c = cumulative_counts(&[3.0, 1.0, 2.0, 2.0, 5.0]).unwrap();
        assert_eq!(c, vec![(1.0, 5), (2.0, 4), (3.0, 2), (5.0, 1)]);
    }

    #[test]
    fn bins_too_narrow_for_the_range_are_refused_not_allocated() {
        let m = [0.1, 1.0, 10.0];
        // 2 dex over 1e-9 dex bins: 2e9 bins; 1e-320 dex: beyond any integer index.
        for w in [1e-9, 1e-320] {
            let e = mass_function(&m, &Binning::WidthDex(w)).unwrap_err();
            assert!(e.message.contains("give a wider bin"), "{}", e.message);
        }
        // The bound itself: 2 dex in 2e-6 dex bins is a million bins and one.
        assert!(mass_function(&m, &Binning::WidthDex(2e-6)).is_err());
        assert_eq!(
            mass_function(&m, &Binning::WidthDex(1.0))
                .unwrap()
                .bins
                .len(),
            3
        );
    }
}

//! Power law or log-normal for a mass function's tail: the log-likelihood ratio test of Clauset,
//! Shalizi & Newman 2009 (SIAM Review 51, 661, section 5; CSN below) with the normalisation and
//! p-value of Vuong 1989 (Econometrica 57, 307: for two strictly non-nested models, the
//! log-likelihood ratio divided by sqrt(n) times the standard deviation of its pointwise terms
//! is asymptotically standard normal when the two fit equally well).
//!
//! Both models are fitted to the same tail, the n masses x_i >= x_min:
//! - the power law p(x) = (alpha - 1)/x_min (x/x_min)^-alpha with the closed-form alpha of
//!   [`super::powerlaw`];
//! - the log-normal truncated at x_min, p(x) = phi((ln x - mu)/sigma) / (x sigma Q(z0)), with
//!   z0 = (ln x_min - mu)/sigma and Q the standard normal upper tail, fitted by maximum
//!   likelihood over the tail alone (mu and sigma are those of the parent log-normal, whose
//!   peak may lie far below x_min).
//!
//! With l_i the pointwise log-likelihoods, R = sum (l_PL,i - l_LN,i) (positive: the power law
//! fits better), s^2 the mean squared deviation of the terms from their mean (divisor n), the
//! normalised ratio is R / (sqrt(n) s) and the two-sided p-value erfc(|R| / sqrt(2 n s^2)). A
//! small p says the sign of R is not a fluctuation; a large p says the data cannot tell the two
//! apart, the common outcome on tails of modest size, since a log-normal with a large sigma
//! looks like a power law over a limited range (CSN section 5).
//!
//! The fit. With t = ln(x/x_min) >= 0 the truncated log-normal is a normal in t truncated to
//! t >= 0, an exponential family in the natural parameters a = m/sigma^2, b = 1/(2 sigma^2)
//! (m = mu - ln x_min): its density in t is exp(a t - b t^2 - A(a, b)), A the logarithm of
//! the normalising integral, so the log-likelihood is concave in (a, b) and has one maximum.
//! At b = 0 the family becomes the exponential distribution of t with rate -a, which is the
//! power law with alpha - 1 = -a: the power law is the limit of the truncated log-normal as
//! sigma grows without bound with mu - ln x_min = a sigma^2. So the best log-normal fits at
//! least as well as the power law (R <= 0), and by concavity the maximum is at that limit
//! exactly when the derivative in b there, n (E\[t^2\] - mean(t^2)) = n (2 mean(t)^2 -
//! mean(t^2)), is not positive, that is when the variance of t (divisor n) is at least its
//! mean squared (derived here from the concavity; it is also exactly when the truncated
//! normal's maximum-likelihood parameters are not finite). Then R = 0 and Vuong's ratio is
//! 0/0 (the two models coincide, outside his non-nested case): cairn reports R = 0, no
//! normalised ratio and no p-value, and says the two are not distinguished. Otherwise
//! Newton's method in (a, b) with a backtracking line search (which keeps b > 0) climbs from
//! the untruncated mean and standard deviation of t until the Newton decrement is below
//! 1e-14 per mass. A and its derivatives (moments of the truncated normal) are computed from
//! the Mills ratio M(z0) = Q(z0)/phi(z0) at z0 = -m/sigma: A = ln(sigma M(z0)), and the
//! moments E\[w^k\] of w = t/sigma (the excess over the truncation point, in units of sigma)
//! are the products r_1 ... r_k of the tails r_k = k / (z0 + r_(k+1)) of Laplace's continued
//! fraction (which follow from integrating by parts, z0 E\[w^k\] + E\[w^(k+1)\] =
//! k E\[w^(k-1)\]), evaluated backwards from depth 500 for z0 >= 1 (full double precision
//! there), and from `libm`'s erfc with the forward recurrence for z0 < 1. Nothing underflows:
//! near the power-law limit z0 grows as sigma does and the fraction converges faster.
//!
//! powerlaw 2.0.0 (Alstott, Bullmore & Plenz 2014, PLoS ONE 9, e85777), read in its installed
//! source, `Fit(data, xmin=...).distribution_compare('power_law', 'lognormal',
//! normalized_ratio=True)`:
//! - `Lognormal` (distributions.py) evaluates the density as f/C with f = exp(-(ln x -
//!   mu)^2 / (2 sigma^2)) / x and C = sigma sqrt(pi/2) erfc((ln x_min - mu)/(sigma sqrt 2))
//!   (the erfc by mpmath, then cast to float64) over the masses x >= x_min, with zero
//!   likelihoods replaced by 10^-307; the same truncated density as here.
//! - `Distribution.fit` minimises -sum ln p with `scipy.optimize.minimize`, method
//!   Nelder-Mead, `tol=1e-4`, bounds (none) on mu and (0, none) on sigma, starting from the
//!   mean and standard deviation (divisor n) of ln x over the tail
//!   (`Lognormal.generate_initial_parameters`); `noise_flag` marks a fit whose sigma left its
//!   range or whose optimiser reported failure.
//! - `statistics.loglikelihood_ratio(l1, l2, nested=False, normalized_ratio=True)` returns R =
//!   sum(l1 - l2) divided by sqrt(n s^2), s^2 = sum((l1 - l2 - mean)^2)/n, and p = erfc(|R| /
//!   sqrt(2 n s^2)) from the unnormalised R; the sign convention is the one above (positive
//!   favours the first distribution, the power law). `distribution_compare` treats the two as
//!   non-nested (neither name contains the other).
//!
//! Differences, documented rather than copied: Nelder-Mead stops within about 1e-4 of the
//! maximum (its simplex spans that much in mu, sigma and -ln L), so cairn's maximum lies a
//! little higher (on the stored cases by up to 2e-7 in ln L); near the power-law limit the optimiser wanders towards mu -> -infinity,
//! where f and C both underflow to subnormal numbers and their quotient is wrong, so powerlaw
//! can report a log-normal better than the power law when the true supremum is the power law
//! itself (one stored sample shows it, with `noise_flag` set). cairn works with logarithms and
//! the limit's closed-form condition instead.

use libm::erfc;

use super::{check_values, sorted};
use crate::error::Error;

/// Depth of the backward evaluation of Laplace's continued fraction: enough for full double
/// precision at z0 >= 1 (measured once against mpmath's erfc at 40 digits: at z0 = 1 the
/// error of Q/phi - z0 is 9e-12 from depth 200 and below 1e-16 from depth 500).
const FRACTION_DEPTH: usize = 500;

/// A log-normal truncated below at x_min, fitted to the masses at or above it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TruncatedLogNormal {
    /// The truncation point.
    pub xmin: f64,
    /// Mean of ln M of the parent (untruncated) log-normal; NaN at the power-law limit.
    pub mu: f64,
    /// Standard deviation of ln M of the parent; NaN at the power-law limit.
    pub sigma: f64,
    /// Whether the likelihood's supremum is the power-law limit (sigma without bound), where
    /// the best truncated log-normal is the power law itself.
    pub at_power_law_limit: bool,
    /// The maximised log-likelihood over the tail (natural logarithm, masses in the units
    /// given).
    pub log_likelihood: f64,
    /// Number of masses in the tail.
    pub n: usize,
}

/// The comparison of a tail's power law with its truncated log-normal.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TailVsLogNormal {
    /// The tail's lower end.
    pub xmin: f64,
    /// Number of masses >= x_min.
    pub n: usize,
    /// The power law's maximum-likelihood exponent over the tail.
    pub alpha: f64,
    /// The power law's log-likelihood over the tail.
    pub log_likelihood_power_law: f64,
    /// The truncated log-normal fitted to the same tail.
    pub lognormal: TruncatedLogNormal,
    /// R = ln L(power law) - ln L(log-normal): positive favours the power law. Never above
    /// rounding, since the power law is a limit of the log-normals; 0 at that limit.
    pub ratio: f64,
    /// R / (sqrt(n) s), s the standard deviation of the pointwise terms (divisor n); NaN at
    /// the power-law limit (0/0).
    pub normalized_ratio: f64,
    /// Two-sided p-value of Vuong's test, erfc(|R| / sqrt(2 n s^2)); NaN at the power-law
    /// limit.
    pub p_value: f64,
}

/// What a comparison says at a significance level.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Verdict {
    /// p below the level and R > 0.
    PowerLawFavoured,
    /// p below the level and R < 0.
    LogNormalFavoured,
    /// p at or above the level, or the best log-normal is the power law itself.
    NotDistinguished,
}

impl TailVsLogNormal {
    /// The verdict at significance `level` (CSN use 0.1).
    pub fn verdict(&self, level: f64) -> Verdict {
        if self.p_value.is_nan() || self.p_value >= level {
            Verdict::NotDistinguished
        } else if self.ratio > 0.0 {
            Verdict::PowerLawFavoured
        } else {
            Verdict::LogNormalFavoured
        }
    }
}

/// ln sqrt(2 pi).
const LN_SQRT_2PI: f64 = 0.918_938_533_204_672_8;

/// The normal family truncated to t >= 0 at natural parameters (a, b), b > 0: the logarithm
/// A of the normalising integral of exp(a t - b t^2) over t >= 0, and the moments
/// E\[t^k\], k = 1 to 4.
fn truncated_normal(a: f64, b: f64) -> (f64, [f64; 4]) {
    let s = (2.0 * b).sqrt().recip();
    let z0 = -a * s;
    // ln M(z0), M the Mills ratio, and the moments of w = t/s.
    let (ln_mills, m) = if z0 >= 1.0 {
        let mut r = [0.0; 5];
        let mut tail = 0.0;
        for k in (1..=FRACTION_DEPTH).rev() {
            tail = k as f64 / (z0 + tail);
            if k <= 4 {
                r[k] = tail;
            }
        }
        let m1 = r[1];
        let m2 = m1 * r[2];
        let m3 = m2 * r[3];
        let m4 = m3 * r[4];
        (-(z0 + r[1]).ln(), [m1, m2, m3, m4])
    } else {
        let q = 0.5 * erfc(z0 / std::f64::consts::SQRT_2);
        let ln_mills = q.ln() + 0.5 * z0 * z0 + LN_SQRT_2PI;
        let m1 = (-ln_mills).exp() - z0;
        let m2 = 1.0 - z0 * m1;
        let m3 = 2.0 * m1 - z0 * m2;
        let m4 = 3.0 * m2 - z0 * m3;
        (ln_mills, [m1, m2, m3, m4])
    };
    (
        s.ln() + ln_mills,
        [m[0] * s, m[1] * s * s, m[2] * s.powi(3), m[3] * s.powi(4)],
    )
}

/// The mean log-likelihood per mass of the truncated normal in t (without the Jacobian),
/// a m1 - b m2 - A(a, b), given the sample's mean t (m1) and mean t^2 (m2).
fn mean_log_likelihood(a: f64, b: f64, m1: f64, m2: f64) -> f64 {
    a * m1 - b * m2 - truncated_normal(a, b).0
}

/// Maximises the concave mean log-likelihood over (a, b), b > 0, from the untruncated
/// moments; needs var(t) < mean(t)^2 (an interior maximum).
fn newton(m1: f64, m2: f64) -> (f64, f64) {
    let var = m2 - m1 * m1;
    let (mut a, mut b) = (m1 / var, 0.5 / var);
    let mut g = mean_log_likelihood(a, b, m1, m2);
    for _ in 0..200 {
        let (_, e) = truncated_normal(a, b);
        let (ga, gb) = (m1 - e[0], e[1] - m2);
        let haa = -(e[1] - e[0] * e[0]);
        let hab = e[2] - e[0] * e[1];
        let hbb = -(e[3] - e[1] * e[1]);
        let det = haa * hbb - hab * hab;
        if !(det > 0.0 && haa < 0.0) {
            break;
        }
        let da = -(hbb * ga - hab * gb) / det;
        let db = -(haa * gb - hab * ga) / det;
        // The Newton decrement: the expected rise of the mean log-likelihood, times two.
        let decrement = ga * da + gb * db;
        if decrement.is_nan() || decrement <= 1e-28 {
            break;
        }
        let mut step = 1.0;
        let mut moved = false;
        for _ in 0..60 {
            let (na, nb) = (a + step * da, b + step * db);
            if nb > 0.0 {
                let ng = mean_log_likelihood(na, nb, m1, m2);
                if ng >= g + 1e-4 * step * decrement {
                    (a, b, g) = (na, nb, ng);
                    moved = true;
                    break;
                }
            }
            step *= 0.5;
        }
        if !moved || decrement < 1e-14 {
            break;
        }
    }
    (a, b)
}

/// Fits the log-normal truncated at `xmin` to the masses >= `xmin` (at least one above it),
/// by maximum likelihood over those masses alone.
pub fn fit_truncated_lognormal(masses: &[f64], xmin: f64) -> Result<TruncatedLogNormal, Error> {
    let tail = tail_of(masses, xmin)?;
    Ok(fit_tail(&tail, xmin).0)
}

/// The tail t = ln(x/xmin) of the masses >= xmin, checked.
fn tail_of(masses: &[f64], xmin: f64) -> Result<Vec<f64>, Error> {
    check_values(masses, "masses", true)?;
    if !(xmin.is_finite() && xmin > 0.0) {
        return Err(Error::usage(format!(
            "the tail's lower mass must be positive, not {xmin}"
        )));
    }
    let s = sorted(masses);
    let tail: Vec<f64> = s[s.partition_point(|&x| x < xmin)..]
        .iter()
        .map(|&x| (x / xmin).ln())
        .collect();
    if !tail.iter().any(|&t| t > 0.0) {
        return Err(Error::usage(format!(
            "no mass lies above the tail's lower mass {xmin}, so no tail can be fitted; choose a smaller one"
        )));
    }
    // All equal (one value above xmin and none at it): the log-normal's likelihood grows
    // without bound as sigma goes to 0, so it has no maximum either.
    if tail.iter().all(|&t| t == tail[0]) {
        return Err(Error::usage(format!(
            "the masses at or above the tail's lower mass {xmin} are all equal, so no log-normal can be fitted to them; choose a smaller one"
        )));
    }
    Ok(tail)
}

/// The fit over the tail `t` (ln(x/xmin), sorted), and its natural parameters (a, b); b = 0
/// and a = -(alpha - 1) at the power-law limit.
fn fit_tail(t: &[f64], xmin: f64) -> (TruncatedLogNormal, (f64, f64)) {
    let n = t.len() as f64;
    let m1 = t.iter().sum::<f64>() / n;
    let m2 = t.iter().map(|x| x * x).sum::<f64>() / n;
    let var = t.iter().map(|x| (x - m1).powi(2)).sum::<f64>() / n;
    // sum ln x = sum t + n ln xmin: the Jacobian of t = ln(x/xmin) and the unit of x.
    let jacobian = t.iter().sum::<f64>() + n * xmin.ln();
    if var >= m1 * m1 {
        // The power-law limit: the exponential of rate 1/m1 in t.
        let rate = 1.0 / m1;
        let ll = n * rate.ln() - rate * n * m1 - jacobian;
        return (
            TruncatedLogNormal {
                xmin,
                mu: f64::NAN,
                sigma: f64::NAN,
                at_power_law_limit: true,
                log_likelihood: ll,
                n: t.len(),
            },
            (-rate, 0.0),
        );
    }
    let (a, b) = newton(m1, m2);
    let (big_a, _) = truncated_normal(a, b);
    let ll = t.iter().map(|&x| a * x - b * x * x - big_a).sum::<f64>() - jacobian;
    let sigma = (2.0 * b).sqrt().recip();
    (
        TruncatedLogNormal {
            xmin,
            mu: xmin.ln() + a * sigma * sigma,
            sigma,
            at_power_law_limit: false,
            log_likelihood: ll,
            n: t.len(),
        },
        (a, b),
    )
}

/// Compares the power law fitted to the masses >= `xmin` with the log-normal truncated at
/// `xmin` fitted to the same masses (see the module documentation).
pub fn power_law_vs_lognormal(masses: &[f64], xmin: f64) -> Result<TailVsLogNormal, Error> {
    let t = tail_of(masses, xmin)?;
    let n = t.len();
    let nf = n as f64;
    let alpha = 1.0 + nf / t.iter().sum::<f64>();
    let (lognormal, (a, b)) = fit_tail(&t, xmin);
    // Pointwise terms l_PL - l_LN: ln(alpha - 1) - alpha t - ln xmin against
    // a t - b t^2 - A - t - ln xmin; ln xmin cancels.
    let big_a = if lognormal.at_power_law_limit {
        -(alpha - 1.0).ln()
    } else {
        truncated_normal(a, b).0
    };
    let ln_pl = (alpha - 1.0).ln();
    let terms: Vec<f64> = if lognormal.at_power_law_limit {
        vec![0.0; n]
    } else {
        t.iter()
            .map(|&x| ln_pl + big_a - (alpha - 1.0 + a) * x + b * x * x)
            .collect()
    };
    let ratio = terms.iter().sum::<f64>();
    let mean = ratio / nf;
    let var = terms.iter().map(|d| (d - mean).powi(2)).sum::<f64>() / nf;
    let (normalized_ratio, p_value) = if lognormal.at_power_law_limit || var.is_nan() || var <= 0.0
    {
        (f64::NAN, f64::NAN)
    } else {
        (
            ratio / (nf * var).sqrt(),
            erfc(ratio.abs() / (2.0 * nf * var).sqrt()),
        )
    };
    let log_likelihood_power_law = nf * ln_pl - nf * xmin.ln() - alpha * t.iter().sum::<f64>();
    Ok(TailVsLogNormal {
        xmin,
        n,
        alpha,
        log_likelihood_power_law,
        lognormal,
        ratio,
        normalized_ratio,
        p_value,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A tail of equal masses above the lower mass has no maximum-likelihood log-normal (its
    /// likelihood grows without bound as sigma goes to 0): refused with the reason, not NaN.
    #[test]
    fn a_tail_of_equal_masses_is_refused() {
        let masses = [1.0, 2.0, 5.0, 5.0, 5.0];
        let e = power_law_vs_lognormal(&masses, 4.0).unwrap_err();
        assert!(e.message.contains("are all equal"), "{}", e.message);
        assert!(power_law_vs_lognormal(&masses, 6.0).is_err());
        let ok = power_law_vs_lognormal(&[1.0, 2.0, 5.0, 5.0, 6.0], 4.0).unwrap();
        assert!(ok.ratio.is_finite());
    }

    /// Self-consistency, not an outside reference (that is tests/populations_reference.rs):
    /// the two branches meet at z0 = 1, and the limits are the normal's and the
    /// exponential's moments, by definition.
    #[test]
    fn moments_agree_across_the_two_branches() {
        // Just below and at z0 = 1 the two ways of computing must agree: the erfc branch
        // and the continued fraction meet there.
        let b = 0.5; // s = 1
        let (a1, e1) = truncated_normal(-(1.0 - 1e-12), b);
        let (a2, e2) = truncated_normal(-1.0, b);
        assert!((a1 - a2).abs() < 1e-11, "{a1} {a2}");
        for k in 0..4 {
            assert!(
                (e1[k] - e2[k]).abs() < 1e-10 * e2[k],
                "{k}: {} {}",
                e1[k],
                e2[k]
            );
        }
        // The untruncated limit: z0 -> -infinity gives the normal's moments about m.
        let (_, e) = truncated_normal(40.0, 0.5); // m = 40, s = 1
        assert!((e[0] - 40.0).abs() < 1e-12);
        assert!((e[1] - (1600.0 + 1.0)).abs() < 1e-9);
        // The exponential limit: b -> 0 with a = -2 gives E[t^k] = k!/2^k.
        let (aa, e) = truncated_normal(-2.0, 1e-14);
        assert!((aa - (0.5f64).ln()).abs() < 1e-6);
        for (k, fact) in [1.0, 2.0, 6.0, 24.0].iter().enumerate() {
            let want = fact / 2f64.powi(k as i32 + 1);
            assert!((e[k] - want).abs() < 1e-5 * want, "{k}: {} {want}", e[k]);
        }
    }

    /// At an interior maximum of an exponential family's likelihood the model's moments equal
    /// the sample's (here E[t] and E[t^2]); tails near and far from the limit, with ties.
    #[test]
    fn the_maximum_matches_the_sample_moments() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let mut cases: Vec<Vec<f64>> = vec![];
        // Log-normal masses (peak 1, sigma 0.5 in ln M), cut at 0.7, 1 and 2.
        let normal = |rng: &mut rand_chacha::ChaCha8Rng| {
            let (u, v): (f64, f64) = (rng.random(), rng.random());
            (-2.0 * (1.0 - u).ln()).sqrt() * (std::f64::consts::TAU * v).cos()
        };
        let ln: Vec<f64> = (0..400).map(|_| (0.5 * normal(&mut rng)).exp()).collect();
        for cut in [0.7, 1.0, 2.0] {
            cases.push(ln.iter().copied().filter(|&x| x >= cut).collect());
        }
        // A tail of five masses with ties.
        cases.push(vec![1.0, 1.5, 1.5, 1.6, 1.7]);
        for (i, masses) in cases.iter().enumerate() {
            let xmin = masses.iter().copied().fold(f64::INFINITY, f64::min);
            let t: Vec<f64> = masses.iter().map(|x| (x / xmin).ln()).collect();
            let (fit, (a, b)) = fit_tail(&sorted(&t), xmin);
            let n = t.len() as f64;
            let m1 = t.iter().sum::<f64>() / n;
            let m2 = t.iter().map(|x| x * x).sum::<f64>() / n;
            assert!(!fit.at_power_law_limit, "case {i}");
            let (_, e) = truncated_normal(a, b);
            assert!(
                (e[0] - m1).abs() < 1e-9 * m1,
                "case {i}: E[t] {} mean {m1}",
                e[0]
            );
            assert!(
                (e[1] - m2).abs() < 1e-9 * m2,
                "case {i}: E[t^2] {} mean {m2}",
                e[1]
            );
            let r = power_law_vs_lognormal(masses, xmin).unwrap();
            assert!(r.ratio <= 1e-9, "case {i}: R = {}", r.ratio);
            assert!(r.p_value > 0.0 && r.p_value <= 1.0, "case {i}");
        }
    }

    #[test]
    fn a_tail_as_wide_as_an_exponential_is_at_the_limit() {
        // Two masses: the variance of t equals its mean squared.
        let r = power_law_vs_lognormal(&[1.0, 3.0], 1.0).unwrap();
        assert!(r.lognormal.at_power_law_limit && r.ratio == 0.0 && r.p_value.is_nan());
        assert_eq!(r.verdict(0.1), Verdict::NotDistinguished);
        assert!(power_law_vs_lognormal(&[1.0, 2.0], 3.0).is_err());
        assert!(power_law_vs_lognormal(&[1.0, 2.0], 0.0).is_err());
        assert!(power_law_vs_lognormal(&[1.0, 1.0], 1.0).is_err());
    }

    /// Power-law tails fall on both sides of the limit, many close to it, where the likelihood
    /// is flattest: every interior maximum still matches the sample's moments.
    #[test]
    fn newton_converges_on_tails_near_the_limit() {
        use rand::{RngExt, SeedableRng};
        let (mut interior, mut limit) = (0, 0);
        for seed in 0..300u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let n = 20 + (seed as usize % 7) * 40;
            let masses: Vec<f64> = (0..n)
                .map(|_| (1.0 - rng.random::<f64>()).powf(-1.0 / 1.35))
                .collect();
            let xmin = masses.iter().copied().fold(f64::INFINITY, f64::min);
            let t: Vec<f64> = sorted(&masses).iter().map(|x| (x / xmin).ln()).collect();
            let (fit, (a, b)) = fit_tail(&t, xmin);
            if fit.at_power_law_limit {
                limit += 1;
                continue;
            }
            interior += 1;
            let nf = n as f64;
            let m1 = t.iter().sum::<f64>() / nf;
            let m2 = t.iter().map(|x| x * x).sum::<f64>() / nf;
            let (_, e) = truncated_normal(a, b);
            assert!(
                (e[0] - m1).abs() < 1e-8 * m1,
                "seed {seed}: E[t] {} mean {m1}",
                e[0]
            );
            assert!(
                (e[1] - m2).abs() < 1e-8 * m2,
                "seed {seed}: E[t^2] {} {m2}",
                e[1]
            );
        }
        assert!(
            interior > 50 && limit > 50,
            "{interior} interior, {limit} at the limit"
        );
    }
}

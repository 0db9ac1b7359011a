//! Mass-size relation by ordinary least squares, and the comparison of two fitted slopes.
//!
//! `fit_line` is ordinary least squares of y on x (y = a + b x) with the textbook standard
//! errors, written as `scipy.stats.linregress` writes them: with population (co)variances
//! s_xx, s_xy, s_yy (divisor n) and r = s_xy / sqrt(s_xx s_yy),
//! b = s_xy / s_xx, a = mean(y) - b mean(x), se(b) = sqrt((1 - r^2) s_yy / s_xx / (n - 2)),
//! se(a) = se(b) sqrt(s_xx + mean(x)^2). `fit_mass_size` applies it to log10 M against
//! log10 R. The rms scatter is sqrt(mean(residual^2)) in dex (divisor n); the residual
//! standard deviation with divisor n - 2 is given too.
//!
//! The slope's uncertainty by a paired bootstrap (Efron & Tibshirani 1993, An Introduction to
//! the Bootstrap, chapter 9, "bootstrapping pairs", from memory): the n (x, y) pairs are
//! resampled with replacement and refitted; the standard deviation of the slopes (divisor
//! B - 1) and their central [`INTERVAL_LEVEL`] percentile interval (numpy's linear
//! percentiles) describe its spread. Unlike the textbook error it assumes neither Gaussian
//! scatter nor the same scatter at every x; with Gaussian scatter of constant width it agrees
//! with the textbook error on large samples. Resample r draws from ChaCha8 seeded by the
//! caller's seed on stream r, so the results do not depend on the rayon thread count; a
//! resample whose x values are all equal has no slope and is left out (counted).
//!
//! Two slopes b1 +/- s1 and b2 +/- s2 from independent populations differ by b1 - b2 with
//! combined uncertainty sqrt(s1^2 + s2^2) (independent Gaussian errors); the significance is
//! |b1 - b2| / sqrt(s1^2 + s2^2) in sigma.

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use super::check_values;
use super::lognormal::INTERVAL_LEVEL;
use super::powerlaw::Bootstrap;
use super::summary::quantiles_of;
use crate::error::Error;

/// A least-squares straight line y = intercept + slope x.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineFit {
    /// Slope b.
    pub slope: f64,
    /// Intercept a.
    pub intercept: f64,
    /// Standard error of the slope.
    pub slope_error: f64,
    /// Standard error of the intercept.
    pub intercept_error: f64,
    /// Pearson correlation coefficient.
    pub r: f64,
    /// Root-mean-square residual about the line, divisor n.
    pub rms_scatter: f64,
    /// Residual standard deviation, divisor n - 2.
    pub residual_std: f64,
    /// Number of points.
    pub n: usize,
}

/// Least-squares fit of y = a + b x (at least three points, x not all equal).
pub fn fit_line(x: &[f64], y: &[f64]) -> Result<LineFit, Error> {
    check_values(x, "x values", false)?;
    check_values(y, "y values", false)?;
    if x.len() != y.len() {
        return Err(Error::usage(format!(
            "a line fit needs as many y values as x values, but {} and {} were given",
            x.len(),
            y.len()
        )));
    }
    let n = x.len();
    if n < 3 {
        return Err(Error::usage(
            "a line fit with standard errors needs at least three points",
        ));
    }
    // Tested on the values themselves: the sum of n equal values over n need not give the
    // value back, so a zero spread about the mean cannot be relied on to show it.
    if x.iter().all(|&v| v == x[0]) {
        return Err(Error::usage(
            "all x values are equal, so no slope can be fitted",
        ));
    }
    let nf = n as f64;
    let xm = x.iter().sum::<f64>() / nf;
    let ym = y.iter().sum::<f64>() / nf;
    let (mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0);
    for (&xi, &yi) in x.iter().zip(y) {
        let (dx, dy) = (xi - xm, yi - ym);
        sxx += dx * dx;
        sxy += dx * dy;
        syy += dy * dy;
    }
    let (sxx, sxy, syy) = (sxx / nf, sxy / nf, syy / nf);
    if sxx == 0.0 {
        return Err(Error::usage(
            "all x values are equal, so no slope can be fitted",
        ));
    }
    let r = if syy == 0.0 {
        0.0
    } else {
        (sxy / (sxx * syy).sqrt()).clamp(-1.0, 1.0)
    };
    let slope = sxy / sxx;
    let intercept = ym - slope * xm;
    let df = nf - 2.0;
    let slope_error = ((1.0 - r * r) * syy / sxx / df).sqrt();
    let intercept_error = slope_error * (sxx + xm * xm).sqrt();
    let ss_res: f64 = x
        .iter()
        .zip(y)
        .map(|(&xi, &yi)| (yi - intercept - slope * xi).powi(2))
        .sum();
    Ok(LineFit {
        slope,
        intercept,
        slope_error,
        intercept_error,
        r,
        rms_scatter: (ss_res / nf).sqrt(),
        residual_std: (ss_res / df).sqrt(),
        n,
    })
}

/// Fits log10 M = a + b log10 R to positive radii and masses (any consistent units).
pub fn fit_mass_size(radii: &[f64], masses: &[f64]) -> Result<LineFit, Error> {
    check_values(radii, "radii", true)?;
    check_values(masses, "masses", true)?;
    let lr: Vec<f64> = radii.iter().map(|r| r.log10()).collect();
    let lm: Vec<f64> = masses.iter().map(|m| m.log10()).collect();
    fit_line(&lr, &lm)
}

/// Bootstrap distribution of a fitted slope.
#[derive(Debug, Clone, PartialEq)]
pub struct SlopeBootstrap {
    /// The slope of each resample that has one, in resample order.
    pub slopes: Vec<f64>,
    /// Resamples whose x values were all equal (left out).
    pub n_failed: usize,
    /// Standard deviation of the slopes (divisor B - 1); NaN below two slopes.
    pub slope_std: f64,
    /// Central [`INTERVAL_LEVEL`] percentile interval of the slopes; NaN without slopes.
    pub slope_interval: (f64, f64),
}

/// Paired bootstrap of the least-squares slope of y on x (see the module documentation).
pub fn bootstrap_slope(x: &[f64], y: &[f64], boot: &Bootstrap) -> Result<SlopeBootstrap, Error> {
    bootstrap_slope_with(x, y, boot, &|| {})
}

/// [`bootstrap_slope`], calling `tick` once per resample (from any thread); the result does
/// not depend on it.
pub fn bootstrap_slope_with(
    x: &[f64],
    y: &[f64],
    boot: &Bootstrap,
    tick: &(dyn Fn() + Sync),
) -> Result<SlopeBootstrap, Error> {
    // The same checks as the fit itself.
    fit_line(x, y)?;
    if boot.resamples < 2 {
        return Err(Error::usage("a bootstrap needs at least 2 resamples"));
    }
    let n = x.len();
    let fits: Vec<Option<f64>> = (0..boot.resamples)
        .into_par_iter()
        .map_init(
            || (Vec::with_capacity(n), Vec::with_capacity(n)),
            |(xs, ys), r| {
                let mut rng = ChaCha8Rng::seed_from_u64(boot.seed);
                rng.set_stream(r as u64);
                xs.clear();
                ys.clear();
                for _ in 0..n {
                    let i = rng.random_range(0..n);
                    xs.push(x[i]);
                    ys.push(y[i]);
                }
                let slope = fit_line(xs, ys).ok().map(|f| f.slope);
                tick();
                slope
            },
        )
        .collect();
    let slopes: Vec<f64> = fits.iter().flatten().copied().collect();
    let k = slopes.len();
    let slope_std = if k >= 2 {
        let mean = slopes.iter().sum::<f64>() / k as f64;
        (slopes.iter().map(|b| (b - mean).powi(2)).sum::<f64>() / (k - 1) as f64).sqrt()
    } else {
        f64::NAN
    };
    let slope_interval = if k >= 1 {
        let tail = 50.0 * (1.0 - INTERVAL_LEVEL);
        let q = quantiles_of(&slopes, &[tail, 100.0 - tail]);
        (q[0], q[1])
    } else {
        (f64::NAN, f64::NAN)
    };
    Ok(SlopeBootstrap {
        n_failed: fits.len() - k,
        slopes,
        slope_std,
        slope_interval,
    })
}

/// [`bootstrap_slope`] of log10 M on log10 R, the pairs (radius, mass) resampled together.
pub fn bootstrap_mass_size(
    radii: &[f64],
    masses: &[f64],
    boot: &Bootstrap,
) -> Result<SlopeBootstrap, Error> {
    bootstrap_mass_size_with(radii, masses, boot, &|| {})
}

/// [`bootstrap_mass_size`], calling `tick` once per resample (from any thread).
pub fn bootstrap_mass_size_with(
    radii: &[f64],
    masses: &[f64],
    boot: &Bootstrap,
    tick: &(dyn Fn() + Sync),
) -> Result<SlopeBootstrap, Error> {
    check_values(radii, "radii", true)?;
    check_values(masses, "masses", true)?;
    let lr: Vec<f64> = radii.iter().map(|r| r.log10()).collect();
    let lm: Vec<f64> = masses.iter().map(|m| m.log10()).collect();
    bootstrap_slope_with(&lr, &lm, boot, tick)
}

/// The difference of two independently measured slopes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SlopeDifference {
    /// First slope minus second.
    pub difference: f64,
    /// Combined uncertainty sqrt(s1^2 + s2^2).
    pub error: f64,
    /// |difference| / error, in sigma.
    pub significance: f64,
}

/// Compares two slopes given as (value, standard error), e.g. two mass-size slopes or two
/// power-law exponents.
pub fn slope_difference(first: (f64, f64), second: (f64, f64)) -> Result<SlopeDifference, Error> {
    let values = [first.0, first.1, second.0, second.1];
    check_values(&values, "slopes and their errors", false)?;
    if first.1 < 0.0 || second.1 < 0.0 || first.1 + second.1 == 0.0 {
        return Err(Error::usage(
            "slope errors must be non-negative and not both zero",
        ));
    }
    let difference = first.0 - second.0;
    let error = first.1.hypot(second.1);
    Ok(SlopeDifference {
        difference,
        error,
        significance: difference.abs() / error,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_line_has_zero_errors() {
        let x = [1.0, 2.0, 3.0, 4.0];
        let y: Vec<f64> = x.iter().map(|v| 0.5 + 2.0 * v).collect();
        let f = fit_line(&x, &y).unwrap();
        assert!((f.slope - 2.0).abs() < 1e-14 && (f.intercept - 0.5).abs() < 1e-14);
        assert!(f.slope_error < 1e-7 && f.rms_scatter < 1e-14);
        assert!(fit_line(&[1.0, 1.0, 1.0], &[1.0, 2.0, 3.0]).is_err());
        assert!(fit_line(&[1.0, 2.0], &[1.0, 2.0]).is_err());
    }

    /// Equal x values whose mean, summed in floating point, is not the value itself (three
    /// times 0.1 summed and divided by three gives 0.10000000000000002): refused, as
    /// scipy's linregress refuses identical x values, rather than fitted to rounding noise.
    /// In a bootstrap of x = (0.1, 0.1, 0.8) the resamples of one value only (all three
    /// draws among the two equal ones, (2/3)^3, or all on the third, (1/3)^3: 9/27 = 1/3 of
    /// them; combinatorics) are the failed ones, within five binomial standard deviations.
    #[test]
    fn equal_x_values_are_refused_however_they_round() {
        let x = [0.1; 3];
        let mean = x.iter().sum::<f64>() / 3.0;
        assert_ne!(mean, 0.1, "the case rounds");
        assert!(fit_line(&x, &[1.0, 2.0, 3.0]).is_err());
        let b = bootstrap_slope(
            &[0.1, 0.1, 0.8],
            &[1.0, 2.0, 3.0],
            &Bootstrap {
                resamples: 3000,
                seed: 4,
            },
        )
        .unwrap();
        let (expected, sd) = (1000.0, (3000.0f64 * (1.0 / 3.0) * (2.0 / 3.0)).sqrt());
        assert!(
            (b.n_failed as f64 - expected).abs() < 5.0 * sd,
            "{} failed resamples",
            b.n_failed
        );
        assert!(b.slopes.iter().all(|s| s.is_finite() && *s > 0.0));
    }

    #[test]
    fn three_point_line_by_hand() {
        // x = 0, 1, 2; y = 0, 2, 1: b = 0.5, a = 0.5, residuals -0.5, 1, -0.5.
        let f = fit_line(&[0.0, 1.0, 2.0], &[0.0, 2.0, 1.0]).unwrap();
        assert!((f.slope - 0.5).abs() < 1e-15 && (f.intercept - 0.5).abs() < 1e-15);
        assert!((f.rms_scatter - 0.5f64.sqrt()).abs() < 1e-15);
        assert!((f.residual_std - 1.5f64.sqrt()).abs() < 1e-15);
        // se(b) = s / sqrt(sum dx^2) = sqrt(1.5)/sqrt(2).
        assert!((f.slope_error - (0.75f64).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn bootstrap_is_seeded_and_thread_count_independent() {
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let x: Vec<f64> = (0..200).map(|_| rng.random::<f64>()).collect();
        let y: Vec<f64> = x
            .iter()
            .map(|v| 1.0 + 2.0 * v + 0.3 * (rng.random::<f64>() - 0.5))
            .collect();
        let boot = Bootstrap {
            resamples: 64,
            seed: 11,
        };
        let in_pool = |threads: usize| {
            rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap()
                .install(|| bootstrap_slope(&x, &y, &boot).unwrap())
        };
        let one = in_pool(1);
        assert_eq!(one, in_pool(2));
        assert_eq!((one.slopes.len(), one.n_failed), (64, 0));
        let fit = fit_line(&x, &y).unwrap();
        let (lo, hi) = one.slope_interval;
        assert!(
            lo < fit.slope && fit.slope < hi && one.slope_std > 0.0,
            "{one:?}"
        );
        let other = bootstrap_slope(
            &x,
            &y,
            &Bootstrap {
                resamples: 64,
                seed: 12,
            },
        )
        .unwrap();
        assert_ne!(one.slopes, other.slopes);
        // Three points of which two share x: some resamples have one x only, and are counted.
        let few = bootstrap_slope(&[1.0, 1.0, 2.0], &[1.0, 2.0, 3.0], &boot).unwrap();
        assert!(few.n_failed > 0 && few.slopes.len() + few.n_failed == 64);
        assert!(
            bootstrap_slope(
                &x,
                &y,
                &Bootstrap {
                    resamples: 1,
                    seed: 1
                }
            )
            .is_err()
        );
    }

    #[test]
    fn slope_difference_adds_errors_in_quadrature() {
        let d = slope_difference((2.0, 0.3), (1.5, 0.4)).unwrap();
        assert!((d.difference - 0.5).abs() < 1e-15);
        assert!((d.error - 0.5).abs() < 1e-15);
        assert!((d.significance - 1.0).abs() < 1e-15);
        assert!(slope_difference((1.0, 0.0), (1.0, 0.0)).is_err());
    }
}

//! Maximum-likelihood log-normal fit to a whole mass distribution.
//!
//! With y = ln M, the maximum-likelihood parameters are the closed forms mu = mean(y) and
//! sigma = sqrt(mean((y - mu)^2)) (divisor n, not n - 1). This is what
//! `scipy.stats.lognorm.fit(data, floc=0)` returns as shape = sigma, scale = exp(mu).
//! Uncertainties are the large-sample (Fisher) errors sigma/sqrt(n) on mu and sigma/sqrt(2n)
//! on sigma.
//!
//! Peak convention: dN/dln M (equivalently dN/dlog10 M) is a Gaussian in ln M with mean mu, so
//! its peak, the "characteristic mass" of a log-normal mass function, is exp(mu), which is also
//! the median mass. The peak of dN/dM itself lies lower, at exp(mu - sigma^2).

use super::check_values;
use crate::error::Error;

/// A log-normal fit: ln M ~ Normal(mu, sigma).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LogNormalFit {
    /// Mean of ln M.
    pub mu: f64,
    /// Standard deviation of ln M (maximum likelihood, divisor n).
    pub sigma: f64,
    /// Standard error of mu, sigma/sqrt(n).
    pub mu_error: f64,
    /// Standard error of sigma, sigma/sqrt(2n).
    pub sigma_error: f64,
    /// Number of masses.
    pub n: usize,
}

impl LogNormalFit {
    /// Peak mass of dN/dlog M, exp(mu) (also the median mass).
    pub fn peak_mass(&self) -> f64 {
        self.mu.exp()
    }

    /// Peak of dN/dM, exp(mu - sigma^2).
    pub fn peak_mass_dn_dm(&self) -> f64 {
        (self.mu - self.sigma * self.sigma).exp()
    }

    /// Width of dN/dlog10 M in dex, sigma / ln 10.
    pub fn sigma_dex(&self) -> f64 {
        self.sigma / std::f64::consts::LN_10
    }
}

/// Fits a log-normal to positive, finite masses (at least two).
pub fn fit_lognormal(masses: &[f64]) -> Result<LogNormalFit, Error> {
    check_values(masses, "masses", true)?;
    if masses.len() < 2 {
        return Err(Error::usage("a log-normal fit needs at least two masses"));
    }
    let n = masses.len() as f64;
    let logs: Vec<f64> = masses.iter().map(|m| m.ln()).collect();
    let mu = logs.iter().sum::<f64>() / n;
    let sigma = (logs.iter().map(|y| (y - mu).powi(2)).sum::<f64>() / n).sqrt();
    Ok(LogNormalFit {
        mu,
        sigma,
        mu_error: sigma / n.sqrt(),
        sigma_error: sigma / (2.0 * n).sqrt(),
        n: masses.len(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn closed_form_on_powers_of_e() {
        let e = std::f64::consts::E;
        // ln M = 0, 1, 2: mu = 1, sigma = sqrt(2/3).
        let f = fit_lognormal(&[1.0, e, e * e]).unwrap();
        assert!((f.mu - 1.0).abs() < 1e-15);
        assert!((f.sigma - (2.0f64 / 3.0).sqrt()).abs() < 1e-15);
        assert!((f.peak_mass() - e).abs() < 1e-14);
        assert!(f.peak_mass_dn_dm() < f.peak_mass());
        assert!((f.mu_error - f.sigma / 3f64.sqrt()).abs() < 1e-16);
        assert!(fit_lognormal(&[1.0]).is_err());
    }
}

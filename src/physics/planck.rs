//! The Planck function B_nu(T) (Planck 1901).

use super::constants::{C, H, JY, K_B};

/// Planck function B_nu(T) [W m^-2 Hz^-1 sr^-1] at frequency `nu_hz` \[Hz\] and temperature
/// `t_k` \[K\]:
///
/// B_nu(T) = (2 h nu^3 / c^2) / (exp(h nu / k T) - 1),
///
/// with the denominator computed by `exp_m1`, so that the Rayleigh-Jeans limit
/// (h nu << k T) keeps full relative precision. Returns 0 for T <= 0 and NaN for NaN input.
pub fn planck_nu(nu_hz: f64, t_k: f64) -> f64 {
    if t_k.is_nan() || nu_hz.is_nan() {
        return f64::NAN;
    }
    if t_k <= 0.0 {
        return 0.0;
    }
    let x = H * nu_hz / (K_B * t_k);
    2.0 * H * nu_hz.powi(3) / (C * C) / x.exp_m1()
}

/// Planck function B_nu(T) in Jy sr^-1 (1 Jy = 1e-26 W m^-2 Hz^-1).
pub fn planck_nu_jy_per_sr(nu_hz: f64, t_k: f64) -> f64 {
    planck_nu(nu_hz, t_k) / JY
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rayleigh_jeans_and_wien_limits() {
        // Rayleigh-Jeans limit 2 nu^2 k T / c^2 for h nu / k T ~ 5e-4 (textbook limit of the
        // Planck law): agreement to the first-order correction x/2.
        let (nu, t) = (1.0e9, 100.0);
        let rj = 2.0 * nu * nu * K_B * t / (C * C);
        let x = H * nu / (K_B * t);
        let b = planck_nu(nu, t);
        assert!(
            ((b / rj) - (1.0 - x / 2.0)).abs() < x * x,
            "ratio {}",
            b / rj
        );
        // Wien limit (h nu >> k T): 2 h nu^3 / c^2 exp(-x). At x = h nu / k T ~ 14.4 the
        // Planck law exceeds it by the factor e^x / (e^x - 1) = 1 / (1 - e^-x) exactly
        // (1 + 5.6e-7, well above f64 resolution), compared to 1e-12 (a few roundings).
        let (nu, t) = (3.0e12, 10.0);
        let x = H * nu / (K_B * t);
        assert!(x > 10.0 && x < 15.0, "x = {x}");
        let wien = 2.0 * H * nu.powi(3) / (C * C) * (-x).exp();
        let ratio = planck_nu(nu, t) / wien;
        let exact = 1.0 / (1.0 - (-x).exp());
        assert!(
            (ratio / exact - 1.0).abs() < 1e-12,
            "ratio {ratio}, exact {exact}"
        );
        assert_eq!(planck_nu(nu, 0.0), 0.0);
    }
}

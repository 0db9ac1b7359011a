//! Dust opacity, the optically thin modified blackbody, and simple mass scales (dust mass,
//! Jeans mass and length).

use super::constants::{C, G, K_B, M_H};
use super::planck::planck_nu;
use serde::{Deserialize, Serialize};

/// Mean molecular weight per hydrogen molecule, mu_H2 = 2.8 (Kauffmann et al. 2008, A&A 487,
/// 993, appendix A): converts an H2 column or number density to a mass column or density.
pub const MU_H2: f64 = 2.8;
/// Mean molecular weight per free particle, mu_p = 2.33: H2 and He with He/H = 0.1 by number
/// and no metals, 2.8 / 1.2 (common practice; Kauffmann et al. 2008, appendix A, give 2.37
/// with metals, from memory): sets the isothermal sound speed.
pub const MU_P: f64 = 2.33;

/// A power-law dust opacity kappa_nu = kappa_0 (nu / nu_0)^beta, per unit mass of gas (dust
/// plus gas, gas-to-dust mass ratio already folded into kappa_0).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DustOpacity {
    /// Opacity at the reference frequency [cm^2 g^-1 of gas].
    pub kappa0_cm2_per_g: f64,
    /// Reference frequency \[Hz\].
    pub nu0_hz: f64,
    /// Emissivity index beta.
    pub beta: f64,
}

impl Default for DustOpacity {
    /// kappa_0 = 0.1 cm^2 g^-1 at nu_0 = 1 THz, beta = 2 (Beckwith et al. 1990, AJ 99, 924;
    /// Hildebrand 1983, QJRAS 24, 267; 0.1 cm^2/g of gas for a gas-to-dust ratio of 100).
    fn default() -> Self {
        DustOpacity {
            kappa0_cm2_per_g: 0.1,
            nu0_hz: 1.0e12,
            beta: 2.0,
        }
    }
}

impl DustOpacity {
    /// kappa_nu [cm^2 g^-1] at frequency `nu_hz`.
    pub fn kappa_cm2_per_g(&self, nu_hz: f64) -> f64 {
        self.kappa0_cm2_per_g * (nu_hz / self.nu0_hz).powf(self.beta)
    }

    /// kappa_nu [m^2 kg^-1] at frequency `nu_hz` (1 cm^2/g = 0.1 m^2/kg).
    pub fn kappa_si(&self, nu_hz: f64) -> f64 {
        self.kappa_cm2_per_g(nu_hz) * 0.1
    }

    /// kappa at a wavelength \[um\].
    pub fn kappa_cm2_per_g_at_um(&self, wavelength_um: f64) -> f64 {
        self.kappa_cm2_per_g(C / (wavelength_um * 1e-6))
    }
}

/// Optically thin modified blackbody intensity I_nu [W m^-2 Hz^-1 sr^-1] of an H2 column
/// density `n_h2_m2` [m^-2] at frequency `nu_hz` and dust temperature `t_k`:
///
/// I_nu = N(H2) mu_H2 m_H kappa_nu B_nu(T)   (Hildebrand 1983; Kauffmann et al. 2008, appendix A).
pub fn intensity_from_column(n_h2_m2: f64, nu_hz: f64, t_k: f64, opacity: &DustOpacity) -> f64 {
    n_h2_m2 * MU_H2 * M_H * opacity.kappa_si(nu_hz) * planck_nu(nu_hz, t_k)
}

/// The inverse of [`intensity_from_column`]: N(H2) [m^-2] from I_nu [W m^-2 Hz^-1 sr^-1].
pub fn column_density_from_intensity(
    intensity_si: f64,
    nu_hz: f64,
    t_k: f64,
    opacity: &DustOpacity,
) -> f64 {
    intensity_si / (MU_H2 * M_H * opacity.kappa_si(nu_hz) * planck_nu(nu_hz, t_k))
}

/// Gas mass \[kg\] of optically thin dust emission: M = S_nu d^2 / (kappa_nu B_nu(T))
/// (Hildebrand 1983), with flux density `flux_jy` \[Jy\], distance `distance_m` \[m\], frequency
/// `nu_hz`, dust temperature `t_k` and the opacity law (per gram of gas).
pub fn dust_mass(
    flux_jy: f64,
    distance_m: f64,
    nu_hz: f64,
    t_k: f64,
    opacity: &DustOpacity,
) -> f64 {
    let s_si = flux_jy * super::constants::JY;
    s_si * distance_m * distance_m / (opacity.kappa_si(nu_hz) * planck_nu(nu_hz, t_k))
}

/// Isothermal sound speed c_s = (k_B T / (mu_p m_H))^(1/2) [m s^-1] (mu_p = 2.33, [`MU_P`]).
pub fn sound_speed(t_k: f64) -> f64 {
    sound_speed_with(t_k, MU_P)
}

/// [`sound_speed`] with the mean molecular weight per particle `mu_p` given.
pub fn sound_speed_with(t_k: f64, mu_p: f64) -> f64 {
    (K_B * t_k / (mu_p * M_H)).sqrt()
}

/// Jeans length lambda_J = (pi c_s^2 / (G rho))^(1/2) \[m\] at gas temperature `t_k` and H2
/// number density `n_h2_m3` [m^-3]; c_s uses mu_p = 2.33 ([`MU_P`]) and rho = mu_H2 m_H n(H2)
/// uses mu_H2 = 2.8 (Kauffmann et al. 2008).
pub fn jeans_length(t_k: f64, n_h2_m3: f64) -> f64 {
    jeans_length_of(sound_speed(t_k), MU_H2 * M_H * n_h2_m3)
}

/// Jeans length (pi c_s^2 / (G rho))^(1/2) \[m\] from the sound speed `cs` \[m s^-1\] and the
/// mass density `rho` \[kg m^-3\] (what the catalogue uses, with the run's mean molecular weights).
pub fn jeans_length_of(cs: f64, rho: f64) -> f64 {
    (std::f64::consts::PI * cs * cs / (G * rho)).sqrt()
}

/// Jeans mass M_J = (pi^(5/2) / 6) c_s^3 G^(-3/2) rho^(-1/2) \[kg\] (the mass of a sphere of
/// diameter lambda_J; common practice, e.g. Stahler & Palla 2004, cited from memory), with the same
/// conventions as [`jeans_length`].
pub fn jeans_mass(t_k: f64, n_h2_m3: f64) -> f64 {
    jeans_mass_of(sound_speed(t_k), MU_H2 * M_H * n_h2_m3)
}

/// [`jeans_mass`] from the sound speed `cs` \[m s^-1\] and the mass density `rho` \[kg m^-3\].
pub fn jeans_mass_of(cs: f64, rho: f64) -> f64 {
    std::f64::consts::PI.powf(2.5) / 6.0 * cs.powi(3) / (G.powf(1.5) * rho.sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::physics::constants::PC;

    #[test]
    fn column_and_intensity_are_inverse() {
        let op = DustOpacity::default();
        let nu = C / 850e-6;
        let n = 1.0e26; // 1e22 cm^-2
        let i = intensity_from_column(n, nu, 15.0, &op);
        let back = column_density_from_intensity(i, nu, 15.0, &op);
        assert!((back / n - 1.0).abs() < 1e-14);
    }

    #[test]
    fn jeans_mass_is_sphere_of_diameter_jeans_length() {
        let (t, n) = (10.0, 1.0e10);
        let lj = jeans_length(t, n);
        let rho = MU_H2 * M_H * n;
        let m_sphere = 4.0 / 3.0 * std::f64::consts::PI * rho * (lj / 2.0).powi(3);
        assert!((jeans_mass(t, n) / m_sphere - 1.0).abs() < 1e-13);
        // Jeans length of order 0.1-0.2 pc at 10 K and 1e4 cm^-3 (common practice).
        assert!(lj / PC > 0.1 && lj / PC < 0.3, "lambda_J = {} pc", lj / PC);
    }
}

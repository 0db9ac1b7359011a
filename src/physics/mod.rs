//! Physics of cold dust and self-gravitating gas: constants, the Planck function, dust opacity,
//! the optically thin modified blackbody, the isothermal Lane-Emden (Bonnor-Ebert) sphere and
//! the Jeans mass.
//!
//! Sources:
//! - Physical constants: CODATA 2022 recommended values; astronomical
//!   constants: IAU 2012 Resolution B2 (astronomical unit) and IAU 2015 Resolutions B2/B3
//!   (parsec definition, nominal solar mass parameter) — the releases astropy 8.0.2 uses by
//!   default.
//! - Planck function: Planck (1901); written with `exp_m1` to stay accurate when h nu << k T.
//! - Dust opacity law kappa_nu = kappa_0 (nu / 1 THz)^beta with kappa_0 = 0.1 cm^2 g^-1 of gas
//!   (gas-to-dust ratio 100): Beckwith et al. (1990, AJ 99, 924); Hildebrand (1983, QJRAS 24,
//!   267).
//! - Mean molecular weights mu_H2 = 2.8 (per hydrogen molecule, for mass): Kauffmann et al.
//!   (2008, A&A 487, 993), appendix A; mu_p = 2.33 (per free particle, for the sound speed):
//!   H2 and He with He/H = 0.1 by number and no metals, 2.8 / 1.2 (common practice; Kauffmann
//!   et al. give 2.37 with metals, from memory).
//! - Isothermal sphere: Chandrasekhar (1939), *An Introduction to the Study of Stellar
//!   Structure*, chapter IV; critical (Bonnor-Ebert) sphere: Ebert (1955, Z. Astrophys. 37,
//!   217), Bonnor (1956, MNRAS 116, 351).
//! - Jeans mass and length: Jeans (1902); the form M_J = (pi^(5/2) / 6) c_s^3 G^(-3/2)
//!   rho^(-1/2) is the mass of a sphere of diameter lambda_J = (pi c_s^2 / (G rho))^(1/2)
//!   (common practice; e.g. Stahler & Palla 2004, *The Formation of Stars*, chapter 9, cited
//!   from memory).

pub mod constants;
pub mod dust;
pub mod lane_emden;
pub mod planck;

pub use dust::{
    DustOpacity, MU_H2, MU_P, column_density_from_intensity, dust_mass, intensity_from_column,
    jeans_length, jeans_mass, sound_speed,
};
pub use lane_emden::{BonnorEbertProjection, LaneEmden};
pub use planck::{planck_nu, planck_nu_jy_per_sr};

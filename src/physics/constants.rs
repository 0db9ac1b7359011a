//! Physical and astronomical constants in SI units.
//!
//! The values are those astropy 8.0.2 uses by default (`astropy.physical_constants` =
//! "codata2022", `astropy.astronomical_constants` = "iau2015"); `tests/physics_reference.rs`
//! checks each one for exact equality against `fixtures/physics/constants.json`, written by
//! `tests/oracle/physics_astropy.py`.

/// Newtonian constant of gravitation G [m^3 kg^-1 s^-2] (CODATA 2022).
pub const G: f64 = 6.6743e-11;
/// Boltzmann constant k_B [J K^-1] (CODATA 2022; exact since the 2019 SI redefinition).
pub const K_B: f64 = 1.380649e-23;
/// Planck constant h [J s] (CODATA 2022; exact since the 2019 SI redefinition).
pub const H: f64 = 6.62607015e-34;
/// Speed of light in vacuum c [m s^-1] (exact, SI definition).
pub const C: f64 = 299_792_458.0;
/// Proton mass m_p \[kg\] (CODATA 2022).
pub const M_P: f64 = 1.672_621_925_95e-27;
/// Atomic mass constant (unified atomic mass unit) u \[kg\] (CODATA 2022).
pub const U: f64 = 1.660_539_068_92e-27;
/// The conventional standard atomic weight of hydrogen, 1.008 (IUPAC Commission on Isotopic
/// Abundances and Atomic Weights, conventional value; value quoted from memory): the mass of a
/// hydrogen atom in units of [`U`].
pub const M_H_U: f64 = 1.008;
/// Mass of a hydrogen atom m_H \[kg\]: [`M_H_U`] times the atomic mass constant. Used with the
/// mean molecular weights of Kauffmann et al. (2008).
pub const M_H: f64 = M_H_U * U;
/// Nominal solar mass parameter GM_sun [m^3 s^-2] (IAU 2015 Resolution B3).
pub const GM_SUN: f64 = 1.327_124_4e20;
/// Solar mass M_sun \[kg\] = GM_sun / G, as astropy derives it (IAU 2015 Resolution B3 with
/// CODATA 2022 G).
pub const M_SUN: f64 = GM_SUN / G;
/// Astronomical unit \[m\] (IAU 2012 Resolution B2, exact).
pub const AU: f64 = 149_597_870_700.0;
/// Parsec \[m\] = au / (1 arcsec in radians) (IAU 2015 Resolution B2, note 4), computed in the
/// same order as astropy (au divided by the radian value of one arcsecond).
pub const PC: f64 = AU / ((1.0 / 3600.0) * (std::f64::consts::PI / 180.0));
/// The cosmic microwave background's temperature today \[K\] (Fixsen 2009, ApJ 707, 916), as
/// astropy 8.0.2's Planck 2018 cosmology carries it (`Planck18.Tcmb0`): no dust or gas in a
/// molecular cloud is colder, so cairn refuses lower temperatures as a mistake.
pub const T_CMB: f64 = 2.7255;
/// Jansky [W m^-2 Hz^-1] (definition, IAU).
pub const JY: f64 = 1.0e-26;
/// One arcsecond in radians.
pub const ARCSEC: f64 = (1.0 / 3600.0) * (std::f64::consts::PI / 180.0);

//! Physical units: quantities typed on the command line and the units of map pixels (BUNIT).
//!
//! Owns one small parser for quantities written with their unit (`18.2arcsec`, `850um`,
//! `300pc`, `12K`, `3sigma`, `2e21cm-2`, `3beam`), conversion of each to SI, and the reading
//! of a FITS `BUNIT` string into the kind of quantity a map holds (column density, extinction,
//! surface brightness per steradian or per square arcsecond, arcminute or degree, flux density
//! per beam or per pixel). Unit strings follow the FITS Standard, Definition of the Flexible
//! Image Transport System (FITS), version 4.0 (IAU FITS Working Group, 2016; document of 2018
//! August 13), section 4.3 on units and their prefixes (the prefix table is Table 4.3 of
//! version 3.0, Pence et al. 2010, A&A 524, A42, whose section 4.3 version 4.0 keeps), with
//! the common spellings found in archive headers (`cm^-2`, `MJy sr-1`, `JY/BEAM`,
//! `beam-1 Jy`).
//!
//! Conventions: an all-upper-case `BUNIT` such as `MJY/SR` or `JY BEAM-1` is read
//! case-insensitively, with `M` as mega (common practice for headers written by older
//! software); `mJy` is recognised only in its mixed-case spelling. The factor after the jansky
//! is read in any case (`mJy ARCSEC-2`, `Jy/Beam`): only the prefix's case carries meaning.

use std::fmt;

/// Degrees, arcminutes and arcseconds in radians.
pub const DEG: f64 = std::f64::consts::PI / 180.0;
/// One arcminute in radians.
pub const ARCMIN: f64 = DEG / 60.0;
/// One arcsecond in radians.
pub const ARCSEC: f64 = DEG / 3600.0;
/// One square arcsecond in steradians: (pi/648000)^2, about 2.350443e-11 (the second of arc is
/// (1/60)' = pi/648000 rad by definition: BIPM, The International System of Units (SI
/// Brochure), 8th edition 2006, Table 6).
pub const ARCSEC2: f64 = ARCSEC * ARCSEC;
/// One square arcminute in steradians: (pi/10800)^2, about 8.461595e-8 (the minute of arc is
/// (1/60) degree = pi/10800 rad by definition: BIPM SI Brochure, 8th edition 2006, Table 6).
pub const ARCMIN2: f64 = ARCMIN * ARCMIN;
/// One square degree in steradians: (pi/180)^2, about 3.046174e-4 (the degree is pi/180 rad
/// by definition: BIPM SI Brochure, 8th edition 2006, Table 6).
pub const DEG2: f64 = DEG * DEG;
/// The parsec in metres (from [`crate::physics::constants`]).
pub const PARSEC: f64 = crate::physics::constants::PC;
/// The astronomical unit in metres.
pub const AU: f64 = crate::physics::constants::AU;
/// The speed of light in m/s (exact, SI).
pub const C_LIGHT: f64 = crate::physics::constants::C;
/// The solar mass in kg, as astropy 8.0.2 defines it (see [`crate::physics::constants`]).
pub const M_SUN: f64 = crate::physics::constants::M_SUN;
/// One jansky in SI (W m^-2 Hz^-1).
pub const JANSKY: f64 = crate::physics::constants::JY;

/// What a quantity measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dimension {
    /// An angle on the sky (SI: radians).
    Angle,
    /// A length: distance, size or wavelength (SI: metres).
    Length,
    /// A frequency (SI: hertz).
    Frequency,
    /// A temperature (SI: kelvin).
    Temperature,
    /// A mass (SI: kilograms).
    Mass,
    /// A speed, such as a velocity dispersion (SI: m/s).
    Speed,
    /// A column density (SI: m^-2).
    ColumnDensity,
    /// A volume density of particles (SI: m^-3).
    VolumeDensity,
    /// Magnitudes of extinction.
    Magnitude,
    /// A multiple of the map's noise (`3sigma`).
    Sigma,
    /// A number of pixels (`px`).
    Pixels,
    /// A number of beams (`beam`), for areas.
    Beams,
    /// An area on the sky (SI: steradians).
    SolidAngle,
    /// A surface brightness (SI: W m^-2 Hz^-1 sr^-1).
    SurfaceBrightness,
    /// A flux density per beam (SI: W m^-2 Hz^-1 per beam).
    FluxPerBeam,
    /// A flux density per pixel (SI: W m^-2 Hz^-1 per pixel).
    FluxPerPixel,
    /// A mass absorption coefficient (SI: m^2/kg).
    Opacity,
    /// A plain number with no unit.
    Pure,
}

impl Dimension {
    /// Words for error messages, with an example.
    pub fn describe(self) -> &'static str {
        match self {
            Dimension::Angle => "an angle, such as 18.2arcsec, 0.5arcmin or 0.01deg",
            Dimension::Length => "a length, such as 300pc, 0.1pc, 850um or 1.3mm",
            Dimension::Frequency => "a frequency, such as 353GHz",
            Dimension::Temperature => "a temperature, such as 12K",
            Dimension::Mass => "a mass, such as 2.5Msun",
            Dimension::Speed => "a speed, such as 0.3km/s",
            Dimension::ColumnDensity => "a column density, such as 2e21cm-2",
            Dimension::VolumeDensity => "a volume density, such as 1e4cm-3",
            Dimension::Magnitude => "an extinction, such as 5mag",
            Dimension::Sigma => "a multiple of the noise, such as 3sigma",
            Dimension::Pixels => "a number of pixels, such as 9px",
            Dimension::Beams => "a number of beams, such as 1beam",
            Dimension::SolidAngle => "an area on the sky, such as 400arcsec2",
            Dimension::SurfaceBrightness => "a surface brightness, such as 20MJy/sr",
            Dimension::FluxPerBeam => "a flux density per beam, such as 0.05Jy/beam",
            Dimension::FluxPerPixel => "a flux density per pixel, such as 0.01Jy/pixel",
            Dimension::Opacity => "a dust opacity, such as 0.01cm2/g",
            Dimension::Pure => "a plain number, such as 2",
        }
    }
}

/// A number with its dimension, held in SI units (see [`Dimension`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Quantity {
    /// The value in the SI unit of its dimension (or the count, for sigma, px, beam, mag).
    pub si: f64,
    /// What it measures.
    pub dim: Dimension,
    /// The number as given, in the unit it was given in.
    pub given: f64,
    /// That unit in the SI unit of its dimension (1 for a bare number).
    pub factor: f64,
}

impl Quantity {
    /// The value in a unit worth `si_per_unit` SI units, as exactly as the text given allows:
    /// the number given itself when that is its unit (`2e21cm-2` read as 2e21 cm-2, not
    /// 2.0000000000000003e21 through m-2), and the given decimal's exponent shifted when the
    /// units differ by a power of ten (`3e6Jy/sr` as 3 MJy/sr); otherwise through SI.
    pub fn in_unit(&self, si_per_unit: f64) -> f64 {
        if self.factor == si_per_unit {
            return self.given;
        }
        let ratio = self.factor / si_per_unit;
        let k = ratio.log10().round();
        if ratio.is_finite() && ratio > 0.0 && (ratio / 10f64.powf(k) - 1.0).abs() < 1e-12 {
            // Rust's shortest text of the given number is its decimal as typed (up to 15
            // significant digits), so shifting its exponent is exact before the one rounding.
            let text = format!("{:e}", self.given);
            if let Some((mantissa, exp)) = text.split_once('e')
                && let Ok(e) = exp.parse::<i32>()
                && let Ok(v) = format!("{mantissa}e{}", e + k as i32).parse::<f64>()
            {
                return v;
            }
        }
        self.si / si_per_unit
    }
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let (v, u) = match self.dim {
            Dimension::Angle => (self.si / ARCSEC, "arcsec"),
            Dimension::Length => {
                if self.si > 1e12 {
                    (self.si / PARSEC, "pc")
                } else {
                    (self.si * 1e6, "um")
                }
            }
            Dimension::Frequency => (self.si / 1e9, "GHz"),
            Dimension::Temperature => (self.si, "K"),
            Dimension::Mass => (self.si / M_SUN, "Msun"),
            Dimension::Speed => (self.si / 1e3, "km/s"),
            Dimension::ColumnDensity => (self.si * 1e-4, "cm-2"),
            Dimension::VolumeDensity => (self.si * 1e-6, "cm-3"),
            Dimension::Magnitude => (self.si, "mag"),
            Dimension::Sigma => (self.si, "sigma"),
            Dimension::Pixels => (self.si, "px"),
            Dimension::Beams => (self.si, "beam"),
            Dimension::SolidAngle => (self.si / (ARCSEC * ARCSEC), "arcsec2"),
            Dimension::SurfaceBrightness => (self.si / (1e6 * JANSKY), "MJy/sr"),
            Dimension::FluxPerBeam => (self.si / JANSKY, "Jy/beam"),
            Dimension::FluxPerPixel => (self.si / JANSKY, "Jy/pixel"),
            Dimension::Opacity => (self.si * 10.0, "cm2/g"),
            Dimension::Pure => (self.si, ""),
        };
        write!(f, "{}{}", trim_number(v), u)
    }
}

fn trim_number(v: f64) -> String {
    let s = format!("{v:.6e}");
    let parsed: f64 = s.parse().unwrap_or(v);
    let plain = format!("{parsed}");
    if plain.len() <= 12 {
        plain
    } else {
        format!("{parsed:e}")
    }
}

/// Units the quantity parser knows: spelling, dimension, factor to SI.
fn unit_table() -> &'static [(&'static str, Dimension, f64)] {
    use Dimension::*;
    const JY: f64 = JANSKY;
    &[
        ("arcsec", Angle, ARCSEC),
        ("\"", Angle, ARCSEC),
        ("as", Angle, ARCSEC),
        ("mas", Angle, ARCSEC * 1e-3),
        ("arcmin", Angle, ARCMIN),
        ("'", Angle, ARCMIN),
        ("amin", Angle, ARCMIN),
        ("deg", Angle, DEG),
        ("rad", Angle, 1.0),
        ("pc", Length, PARSEC),
        ("kpc", Length, PARSEC * 1e3),
        ("au", Length, AU),
        ("AU", Length, AU),
        ("km", Length, 1e3),
        ("m", Length, 1.0),
        ("cm", Length, 1e-2),
        ("mm", Length, 1e-3),
        ("um", Length, 1e-6),
        ("micron", Length, 1e-6),
        ("µm", Length, 1e-6),
        ("nm", Length, 1e-9),
        ("Hz", Frequency, 1.0),
        ("kHz", Frequency, 1e3),
        ("MHz", Frequency, 1e6),
        ("GHz", Frequency, 1e9),
        ("THz", Frequency, 1e12),
        ("K", Temperature, 1.0),
        ("Msun", Mass, M_SUN),
        ("Msol", Mass, M_SUN),
        ("kg", Mass, 1.0),
        ("g", Mass, 1e-3),
        ("km/s", Speed, 1e3),
        ("m/s", Speed, 1.0),
        ("cm/s", Speed, 1e-2),
        ("cm-2", ColumnDensity, 1e4),
        ("m-2", ColumnDensity, 1.0),
        ("cm-3", VolumeDensity, 1e6),
        ("m-3", VolumeDensity, 1.0),
        ("mag", Magnitude, 1.0),
        ("sigma", Sigma, 1.0),
        ("px", Pixels, 1.0),
        ("pix", Pixels, 1.0),
        ("pixel", Pixels, 1.0),
        ("pixels", Pixels, 1.0),
        ("beam", Beams, 1.0),
        ("beams", Beams, 1.0),
        ("arcsec2", SolidAngle, ARCSEC * ARCSEC),
        ("arcmin2", SolidAngle, ARCMIN * ARCMIN),
        ("deg2", SolidAngle, DEG * DEG),
        ("sr", SolidAngle, 1.0),
        ("MJy/sr", SurfaceBrightness, 1e6 * JY),
        ("Jy/sr", SurfaceBrightness, JY),
        // Per square arcsecond: the same expression as `parse_pixel_unit`'s factor, so that a
        // level given in a map's own unit is the decimal typed (`Quantity::in_unit`).
        ("Jy/arcsec2", SurfaceBrightness, JY / ARCSEC2),
        ("mJy/arcsec2", SurfaceBrightness, 1e-3 * JY / ARCSEC2),
        ("uJy/arcsec2", SurfaceBrightness, 1e-6 * JY / ARCSEC2),
        // Per square arcminute and per square degree, likewise.
        ("Jy/arcmin2", SurfaceBrightness, JY / ARCMIN2),
        ("mJy/arcmin2", SurfaceBrightness, 1e-3 * JY / ARCMIN2),
        ("uJy/arcmin2", SurfaceBrightness, 1e-6 * JY / ARCMIN2),
        ("MJy/deg2", SurfaceBrightness, 1e6 * JY / DEG2),
        ("kJy/deg2", SurfaceBrightness, 1e3 * JY / DEG2),
        ("Jy/deg2", SurfaceBrightness, JY / DEG2),
        ("mJy/deg2", SurfaceBrightness, 1e-3 * JY / DEG2),
        ("Jy/beam", FluxPerBeam, JY),
        ("mJy/beam", FluxPerBeam, 1e-3 * JY),
        ("uJy/beam", FluxPerBeam, 1e-6 * JY),
        ("Jy/pixel", FluxPerPixel, JY),
        ("Jy/px", FluxPerPixel, JY),
        ("mJy/pixel", FluxPerPixel, 1e-3 * JY),
        ("cm2/g", Opacity, 0.1),
        ("m2/kg", Opacity, 1.0),
    ]
}

/// Normalises the spelling of a unit: `^`, `**`, blanks and ` sr-1`-style powers (`arcsec-2`
/// as `/arcsec2`). The power's factor is recognised in any case and written in lower case
/// (`JY BEAM-1` as `JY/beam`, `mJy ARCSEC-2` as `mJy/arcsec2`), what comes before it keeping
/// its own, whose case tells milli from mega.
fn normalise_unit(u: &str) -> String {
    let mut s = u.trim().replace("**", "").replace(['^', ' '], "");
    for (from, to) in [
        ("cm2", "cm2"),
        ("sr-1", "/sr"),
        ("arcsec-2", "/arcsec2"),
        ("arcmin-2", "/arcmin2"),
        ("deg-2", "/deg2"),
        ("beam-1", "/beam"),
        ("pixel-1", "/pixel"),
        ("pix-1", "/pixel"),
        ("s-1", "/s"),
        ("kg-1", "/kg"),
        ("g-1", "/g"),
        ("/pix", "/pixel"),
    ] {
        let cut = s.len().saturating_sub(from.len());
        if from != to
            && s.get(cut..)
                .is_some_and(|end| end.eq_ignore_ascii_case(from))
        {
            s = format!("{}{}", &s[..cut], to);
        }
    }
    s = s.replace("/pixelel", "/pixel");
    // "." is the FITS multiplication sign: "MJy.sr-1" is MJy/sr once "sr-1" reads "/sr".
    s = s.replace("./", "/");
    if s.starts_with("/cm2") || s == "1/cm2" {
        s = "cm-2".into();
    }
    s
}

/// `v` for messages, without the noise of binary fractions: rounded to 10 significant digits,
/// in plain decimals between 1e-4 and 1e15 and with an exponent beyond (400.00000000000006 as
/// 400, a 32-bit 3e21 as 3e21).
pub fn tidy(v: f64) -> String {
    if !v.is_finite() {
        return format!("{v}");
    }
    let rounded: f64 = format!("{v:.9e}").parse().unwrap_or(v);
    if rounded == 0.0 || (1e-4..1e15).contains(&rounded.abs()) {
        format!("{rounded}")
    } else {
        crate::table::fmt_f64(rounded)
    }
}

/// [`tidy`] for a value held as a 32-bit float (a map's pixel), through its shortest
/// decimal form: `1e20`, not the double nearest the float (`1.00000002e20`).
pub fn tidy_f32(v: f32) -> String {
    tidy(f32_as_given(v))
}

/// A 32-bit float as the double its shortest decimal form names (0.3, not 0.30000001192...),
/// for messages that compute with a map's pixel before saying it.
pub fn f32_as_given(v: f32) -> f64 {
    format!("{v:e}").parse().unwrap_or(v as f64)
}

/// Parses `text` as a number followed by a unit whose dimension is one of `allowed`.
///
/// `what` names the option or keyword for the error sentence (for example `--beam`).
/// A bare number is accepted only when `Dimension::Pure` is allowed.
pub fn parse_quantity(text: &str, allowed: &[Dimension], what: &str) -> Result<Quantity, String> {
    let t = text.trim();
    // A length's examples depend on what it is the length of.
    let describe = |d: &Dimension| match (d, what) {
        (Dimension::Length, "--wavelength") => "a wavelength, such as 850um or 1.3mm",
        (Dimension::Length, "--opacity-frequency") => "a wavelength, such as 250um or 1.3mm",
        (Dimension::Length, "--distance") => "a distance, such as 300pc or 1.4kpc",
        (Dimension::Length, "--common-resolution") => "a length, such as 0.05pc",
        (Dimension::Length, "--core-radius") => "a radius, such as 0.02pc or 0.08pc",
        _ => d.describe(),
    };
    let expected = allowed
        .iter()
        .map(describe)
        .collect::<Vec<_>>()
        .join(", or ");
    let bad = || format!("{what} '{text}' is not understood: give {expected}.");
    let split = number_prefix_len(t);
    if split == 0 {
        return Err(bad());
    }
    let number: f64 = t[..split].parse().map_err(|_| bad())?;
    if !number.is_finite() {
        return Err(bad());
    }
    let unit = normalise_unit(&t[split..]);
    if unit.is_empty() {
        if allowed.contains(&Dimension::Pure) {
            return Ok(Quantity {
                si: number,
                dim: Dimension::Pure,
                given: number,
                factor: 1.0,
            });
        }
        return Err(format!("{what} '{text}' has no unit: give {expected}."));
    }
    for (name, dim, factor) in unit_table() {
        if *name == unit {
            if !allowed.contains(dim) {
                return Err(format!(
                    "{what} '{text}' is {}, but {expected} is needed.",
                    article_of(*dim)
                ));
            }
            return Ok(Quantity {
                si: number * factor,
                dim: *dim,
                given: number,
                factor: *factor,
            });
        }
    }
    Err(bad())
}

fn article_of(d: Dimension) -> &'static str {
    let s = d.describe();
    s.split(',').next().unwrap_or(s)
}

/// Length of the leading decimal number (sign, digits, point, exponent) in `t`.
fn number_prefix_len(t: &str) -> usize {
    let b = t.as_bytes();
    let mut i = 0;
    if i < b.len() && (b[i] == b'+' || b[i] == b'-') {
        i += 1;
    }
    let start_digits = i;
    while i < b.len() && (b[i].is_ascii_digit() || b[i] == b'.') {
        i += 1;
    }
    if i == start_digits {
        return 0;
    }
    // Exponent, only when followed by a digit (so "2em" is not eaten).
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        let mut j = i + 1;
        if j < b.len() && (b[j] == b'+' || b[j] == b'-') {
            j += 1;
        }
        if j < b.len() && b[j].is_ascii_digit() {
            while j < b.len() && b[j].is_ascii_digit() {
                j += 1;
            }
            i = j;
        }
    }
    i
}

/// The extinction band of a map in magnitudes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum ExtinctionBand {
    /// Visual extinction A_V.
    V,
    /// K-band extinction A_K.
    K,
}

/// What the pixels of a map measure, with the factor from the stated unit to the SI unit of
/// that kind.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(tag = "kind")]
pub enum PixelUnit {
    /// H2 column density; `to_si` converts to m^-2.
    ColumnDensity { to_si: f64 },
    /// Extinction in magnitudes in a band.
    Extinction { band: ExtinctionBand },
    /// Surface brightness; `to_si` converts to W m^-2 Hz^-1 sr^-1.
    SurfaceBrightness { to_si: f64 },
    /// Flux density per beam; `to_si` converts to W m^-2 Hz^-1 (per beam).
    FluxPerBeam { to_si: f64 },
    /// Flux density per pixel; `to_si` converts to W m^-2 Hz^-1 (per pixel).
    FluxPerPixel { to_si: f64 },
    /// A unit cairn does not convert to column density (a line-integrated intensity such as
    /// `K km/s`, a brightness temperature `K`, a signal-to-noise ratio, or no unit at all):
    /// the map is segmented for its structure only, with levels, sums and means in its own
    /// unit (the map's `unit_text`) and no column densities, masses or physics.
    Other,
}

impl PixelUnit {
    /// Words for the summary, such as "H2 column density".
    pub fn kind_name(&self) -> &'static str {
        match self {
            PixelUnit::ColumnDensity { .. } => "H2 column density",
            PixelUnit::Extinction {
                band: ExtinctionBand::V,
            } => "visual extinction A_V",
            PixelUnit::Extinction {
                band: ExtinctionBand::K,
            } => "K-band extinction A_K",
            PixelUnit::SurfaceBrightness { .. } => "surface brightness",
            PixelUnit::FluxPerBeam { .. } => "flux density per beam",
            PixelUnit::FluxPerPixel { .. } => "flux density per pixel",
            PixelUnit::Other => "no conversion to column density",
        }
    }

    /// The factor to SI of units that carry one (column densities and emission), `None` for
    /// extinction (magnitudes) and units cairn does not convert.
    pub fn to_si(&self) -> Option<f64> {
        match *self {
            PixelUnit::ColumnDensity { to_si }
            | PixelUnit::SurfaceBrightness { to_si }
            | PixelUnit::FluxPerBeam { to_si }
            | PixelUnit::FluxPerPixel { to_si } => Some(to_si),
            PixelUnit::Extinction { .. } | PixelUnit::Other => None,
        }
    }

    /// Whether this is dust emission (needs a wavelength and temperature to become a column).
    pub fn is_emission(&self) -> bool {
        matches!(
            self,
            PixelUnit::SurfaceBrightness { .. }
                | PixelUnit::FluxPerBeam { .. }
                | PixelUnit::FluxPerPixel { .. }
        )
    }
}

/// Reads a FITS `BUNIT` (or a `--unit` value) into what the pixels measure.
///
/// A jansky unit is per steradian, per square arcsecond, per square arcminute, per square
/// degree, per beam or per pixel, with a `/` or as a product with a negative power in either
/// order (`MJy/sr`, `MJy sr-1`, `MJy.sr-1`, `sr-1 MJy`; `mJy/arcsec**2`, `mJy arcsec-2`,
/// `arcsec-2 mJy`; `Jy/arcmin2`, `MJy deg-2`; `Jy/beam`, `beam-1 Jy`), the factor after the
/// jansky in any case (`JY BEAM-1`, `mJy ARCSEC-2`).
/// `band` chooses the extinction band for `mag` maps. `1`, the FITS unit of a dimensionless
/// value (FITS Standard 4.0 sec. 4.3.1), reads as [`PixelUnit::Other`]: values without a
/// unit, measured for their structure alone. Returns `None` for strings that name no quantity
/// cairn can use (`K` brightness temperature, counts, empty).
pub fn parse_pixel_unit(bunit: &str, band: ExtinctionBand) -> Option<PixelUnit> {
    let raw = bunit.trim();
    if raw.is_empty() {
        return None;
    }
    // `beam-1 Jy` is `Jy beam-1`: the factors of a product in either order.
    let swapped = inverse_factor_last(raw);
    let raw = swapped.as_deref().unwrap_or(raw);
    if is_dimensionless(raw) {
        return Some(PixelUnit::Other);
    }
    let all_upper = raw.chars().any(|c| c.is_ascii_alphabetic())
        && !raw.chars().any(|c| c.is_ascii_lowercase());
    let s = normalise_unit(raw);
    let s = s.trim_start_matches("1").to_string();
    let lower = s.to_ascii_lowercase();
    // Column density, with optional species prefix such as "N(H2)" or "H2".
    let col = lower
        .trim_start_matches("n(h2)")
        .trim_start_matches("nh2")
        .trim_start_matches("h2")
        .trim_start_matches("molecules")
        .trim_start_matches("particles")
        .trim_start_matches("/")
        .to_string();
    match col.as_str() {
        "cm-2" | "/cm2" | "cm2-1" => return Some(PixelUnit::ColumnDensity { to_si: 1e4 }),
        "m-2" | "/m2" => return Some(PixelUnit::ColumnDensity { to_si: 1.0 }),
        _ => {}
    }
    match lower.as_str() {
        "mag" | "magnitude" | "magnitudes" => return Some(PixelUnit::Extinction { band }),
        "mag(av)" | "av" | "mag(a_v)" | "a_v" => {
            return Some(PixelUnit::Extinction {
                band: ExtinctionBand::V,
            });
        }
        "mag(ak)" | "ak" | "mag(a_k)" | "a_k" => {
            return Some(PixelUnit::Extinction {
                band: ExtinctionBand::K,
            });
        }
        _ => {}
    }
    // Emission: prefix + Jy + per-what. Case matters (mJy vs MJy) unless all upper case.
    let (prefix, rest) = split_jansky(&s, all_upper)?;
    let rest_l = rest.to_ascii_lowercase();
    let si = prefix * JANSKY;
    match rest_l.as_str() {
        "/sr" | "/steradian" => Some(PixelUnit::SurfaceBrightness { to_si: si }),
        // Per square arcsecond (`mJy/arcsec**2`, `mJy arcsec-2`): per steradian times the
        // square arcseconds in one, so 1 mJy/arcsec2 is 42.545170296... MJy/sr.
        "/arcsec2" => Some(PixelUnit::SurfaceBrightness {
            to_si: si / ARCSEC2,
        }),
        // Per square arcminute and per square degree, the same way: 1 Jy/arcmin2 is
        // 11.818102860... MJy/sr, 1 MJy/deg2 is 3282.8063500... MJy/sr.
        "/arcmin2" => Some(PixelUnit::SurfaceBrightness {
            to_si: si / ARCMIN2,
        }),
        "/deg2" => Some(PixelUnit::SurfaceBrightness { to_si: si / DEG2 }),
        "/beam" => Some(PixelUnit::FluxPerBeam { to_si: si }),
        "/pixel" | "/pix" | "/px" => Some(PixelUnit::FluxPerPixel { to_si: si }),
        _ => None,
    }
}

/// A unit written as a product with its inverse factor first (`beam-1 Jy`, `sr-1 MJy`,
/// `pixel-1.Jy`, `arcsec-2 mJy`, `deg-2 MJy`, `BEAM-1 JY`, as some writers put it) with its
/// two factors the other way round (`Jy beam-1`): the FITS Standard 4.0 section 4.3 writes a
/// product of factors with blanks or `.` between them, and a product is the same whatever the
/// order of its factors. `None` for text that is not two factors of which only the first has a
/// negative power; what the swapped text means is for the caller's parser to decide, so
/// nothing that is not a unit the other way round is read as one.
fn inverse_factor_last(raw: &str) -> Option<String> {
    let factors: Vec<&str> = raw
        .split(|c: char| c.is_whitespace() || c == '.')
        .filter(|f| !f.is_empty())
        .collect();
    let [first, second] = factors[..] else {
        return None;
    };
    // `beam-1`, `sr^-1`, `arcsec**-2` read as `/beam`, `/sr`, `/arcsec2`.
    let per = normalise_unit(first);
    let inverse = !first.contains('/') && per.starts_with('/') && !per[1..].contains('/');
    let plain = !second.contains(['/', '-']);
    (inverse && plain).then(|| format!("{second} {first}"))
}

/// Whether a unit's text is `1`, the FITS unit of a dimensionless value (FITS Standard 4.0
/// sec. 4.3.1: "1" where a unit is required but the value has none).
pub fn is_dimensionless(text: &str) -> bool {
    text.trim() == "1"
}

/// The unit of a map's values as cairn writes it in its outputs: the canonical spelling of the
/// unit it recognised and converts (`cm-2`, `m-2`, `mag`, `MJy/sr`, `mJy/arcsec2`,
/// `Jy/arcmin2`, `MJy/deg2`, `Jy/beam`, `mJy/beam`, `Jy/pixel`, ...), whatever spelling the
/// map's BUNIT or `--unit` used (`1/cm2`, `mag(AK)`, `JY/BEAM`, `JY BEAM-1`, `MJy/steradian`,
/// `Jansky/beam`, `beam-1 Jy`, `mJy/arcsec**2`, `deg-2 MJy`), so
/// that a FITS or VO unit parser reads it (FITS Standard 4.0 sec. 4.3; IVOA VOUnits 1.0). A
/// unit cairn does not convert ([`PixelUnit::Other`]) is kept as `text` gives it, trimmed,
/// except the dimensionless `1`, written as no unit. An extinction's band is no part of its
/// unit (the catalogue's `quantity` names it).
pub fn canonical_unit(unit: Option<PixelUnit>, text: &str) -> String {
    // The SI prefix of a jansky unit, from its factor to SI.
    let prefix = |ratio: f64| {
        [
            ("G", 1e9),
            ("M", 1e6),
            ("k", 1e3),
            ("", 1.0),
            ("m", 1e-3),
            ("u", 1e-6),
        ]
        .into_iter()
        .find(|(_, p)| (ratio / p - 1.0).abs() < 1e-9)
        .map(|(t, _)| t)
    };
    let jansky = |to_si: f64, per: &str| {
        let ratio = to_si / JANSKY;
        match prefix(ratio) {
            Some(t) => format!("{t}Jy/{per}"),
            // No prefix of the table (cannot come from the parser): the factor itself.
            None => format!("{} Jy/{per}", tidy(ratio)),
        }
    };
    // A surface brightness per steradian, or else per square arcsecond, arcminute or degree,
    // whichever solid angle gives a prefix of the table: no factor has a prefix for two of
    // them, as their ratios (3600 between the last three, 3282.8... from the square degree to
    // the steradian) are no powers of ten.
    let surface = |to_si: f64| {
        [
            ("sr", 1.0),
            ("arcsec2", ARCSEC2),
            ("arcmin2", ARCMIN2),
            ("deg2", DEG2),
        ]
        .into_iter()
        .find_map(|(per, omega)| prefix(to_si / JANSKY * omega).map(|t| format!("{t}Jy/{per}")))
        .unwrap_or_else(|| jansky(to_si, "sr"))
    };
    match unit {
        Some(PixelUnit::ColumnDensity { to_si: 1.0 }) => "m-2".into(),
        Some(PixelUnit::ColumnDensity { .. }) => "cm-2".into(),
        Some(PixelUnit::Extinction { .. }) => "mag".into(),
        Some(PixelUnit::SurfaceBrightness { to_si }) => surface(to_si),
        Some(PixelUnit::FluxPerBeam { to_si }) => jansky(to_si, "beam"),
        Some(PixelUnit::FluxPerPixel { to_si }) => jansky(to_si, "pixel"),
        Some(PixelUnit::Other) | None if is_dimensionless(text) => String::new(),
        Some(PixelUnit::Other) | None => text.trim().to_string(),
    }
}

/// `x` rounded to 12 significant digits: a value given in one unit and held in SI (`400pc` in
/// metres) comes back as given (400, not 400.00000000000006) for the records, where the
/// rounding of the SI round trip, some 1e-16 of the value, would read as a digit given.
pub fn as_given(x: f64) -> f64 {
    if !x.is_finite() {
        return x;
    }
    format!("{x:.11e}").parse().unwrap_or(x)
}

/// The extinction band a unit's text names itself (`mag(AK)`, `A_V`), or `None` for a unit
/// whose band is assumed (`mag`) or that is no extinction.
pub fn named_band(text: &str) -> Option<ExtinctionBand> {
    match (
        parse_pixel_unit(text, ExtinctionBand::V),
        parse_pixel_unit(text, ExtinctionBand::K),
    ) {
        (Some(PixelUnit::Extinction { band: a }), Some(PixelUnit::Extinction { band: b }))
            if a == b =>
        {
            Some(a)
        }
        _ => None,
    }
}

/// The units `--unit` names cairn converts to column density, for messages.
pub const CONVERTED_UNITS: &str = "cm-2, m-2, mag, MJy/sr, Jy/sr, mJy/arcsec2, Jy/arcmin2, MJy/deg2, Jy/beam, mJy/beam or Jy/pixel";

/// Reads a `--unit` value: a unit cairn converts (spelt as in BUNIT); `other:TEXT` for a map in
/// a unit cairn does not convert, such as `other:K km/s`, whose structure alone is measured,
/// with TEXT as its unit; or `none` (the same as `other:`) for values without a unit. Returns
/// what the pixels measure and the unit's text for the outputs, or `None` for a value that
/// is none of these (a typing error in a unit cairn converts must not pass silently as a
/// unit without masses).
pub fn parse_unit_option(text: &str, band: ExtinctionBand) -> Option<(PixelUnit, String)> {
    let t = text.trim();
    if t.eq_ignore_ascii_case("none") {
        return Some((PixelUnit::Other, String::new()));
    }
    if let Some(rest) = t
        .get(..6)
        .filter(|p| p.eq_ignore_ascii_case("other:"))
        .map(|_| &t[6..])
    {
        return Some((PixelUnit::Other, rest.trim().to_string()));
    }
    parse_pixel_unit(t, band).map(|u| (u, t.to_string()))
}

/// Where the jansky is in a unit's text, as its symbol `Jy` or its name `Jansky` (any case):
/// the byte position and length of that word.
fn find_jansky(s: &str) -> Option<(usize, usize)> {
    let lower = s.to_ascii_lowercase();
    lower
        .find("jansky")
        .map(|p| (p, 6))
        .or_else(|| lower.find("jy").map(|p| (p, 2)))
}

/// Splits "MJy/sr" (or "MJansky/sr") into (1e6, "/sr"); `None` if the string has no jansky
/// in it.
fn split_jansky(s: &str, all_upper: bool) -> Option<(f64, String)> {
    let (pos, len) = find_jansky(s)?;
    let prefix_txt = &s[..pos];
    let rest = s[pos + len..].to_string();
    let prefix = if all_upper {
        match prefix_txt {
            "" => 1.0,
            "M" => 1e6,
            "K" => 1e3,
            "G" => 1e9,
            "U" => 1e-6,
            _ => return None,
        }
    } else {
        match prefix_txt {
            "" => 1.0,
            "M" => 1e6,
            "k" => 1e3,
            "G" => 1e9,
            "m" => 1e-3,
            "u" | "µ" => 1e-6,
            _ => return None,
        }
    };
    Some((prefix, rest))
}

/// A note for a jansky unit whose letters are all of one case and whose prefix is m or M
/// where the reading goes against the usual unit (`MJY/BEAM` read as mega, `mjy/sr` as
/// milli; not `MJY/SR` or `mjy/beam`): its case cannot tell milli from mega, so the note says
/// which [`parse_pixel_unit`] read (mega when all upper case, milli when all lower) and how
/// to give the other. `None` for any other unit.
pub fn prefix_case_note(bunit: &str) -> Option<String> {
    let written = bunit.trim();
    let swapped = inverse_factor_last(written);
    let raw = swapped.as_deref().unwrap_or(written);
    let (pos, len) = find_jansky(raw)?;
    if pos != 1 {
        return None;
    }
    let letters: Vec<char> = raw.chars().filter(|c| c.is_ascii_alphabetic()).collect();
    let upper = letters.iter().all(|c| c.is_ascii_uppercase());
    let all_lower = letters.iter().all(|c| c.is_ascii_lowercase());
    if !(upper || all_lower) || !matches!(&raw[..1], "m" | "M") {
        return None;
    }
    let rest = normalise_unit(&raw[1 + len..]).to_ascii_lowercase();
    // Said only where the reading goes against the usual unit: MJy/sr is the usual surface
    // brightness (`MJY/SR` is common and means it), mJy the usual flux per beam or pixel.
    let per_sr = matches!(rest.as_str(), "/sr" | "/steradian");
    if upper == per_sr {
        return None;
    }
    let (read, other) = if upper {
        ("MJy", "mJy")
    } else {
        ("mJy", "MJy")
    };
    Some(format!(
        "BUNIT '{written}' is in one case, which cannot tell milli from mega: read as {read}{rest}; if {other}{rest} is meant, give --unit {other}{rest}"
    ))
}

/// The unit of a sum of map values over pixels (map unit times pixel), written so that a
/// FITS or VO unit parser reads it as that product: `pixel` goes into the numerator, before the
/// first `/` (`Jy/beam` gives `Jy pixel/beam`, not `Jy/beam pixel`, which parsers read as
/// Jy / (beam pixel)); a unit per pixel loses its `/pixel` (`Jy/pixel` gives `Jy`); a unit
/// without a `/` is followed by ` pixel`; no unit gives `pixel`.
pub fn times_pixel(unit: &str) -> String {
    let u = unit.trim();
    if u.is_empty() {
        return "pixel".into();
    }
    match u.split_once('/') {
        None => format!("{u} pixel"),
        Some((num, den)) => {
            let (num, den) = (num.trim(), den.trim());
            if matches!(den, "pixel" | "pix") {
                num.to_string()
            } else if num.is_empty() || num == "1" {
                format!("pixel/{den}")
            } else {
                format!("{num} pixel/{den}")
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use Dimension::*;

    #[test]
    fn fits_multiplication_dots_and_one_case_prefixes() {
        // "." multiplies in FITS units (FITS Standard 4.0 sec. 4.3; astropy reads MJy.sr-1 as
        // MJy/sr): the same units as with "/".
        let v = ExtinctionBand::V;
        assert_eq!(
            parse_pixel_unit("MJy.sr-1", v),
            parse_pixel_unit("MJy/sr", v)
        );
        assert_eq!(
            parse_pixel_unit("Jy.beam-1", v),
            parse_pixel_unit("Jy/beam", v)
        );
        assert!(parse_pixel_unit("MJy.sr-1", v).is_some());
        // One-case prefixes: noted only against the usual unit.
        assert_eq!(prefix_case_note("MJY/SR"), None);
        assert_eq!(prefix_case_note("mjy/beam"), None);
        assert_eq!(prefix_case_note("MJy/beam"), None);
        assert_eq!(prefix_case_note("JY/BEAM"), None);
        let n = prefix_case_note("MJY/BEAM").unwrap();
        assert!(
            n.contains("read as MJy/beam") && n.contains("--unit mJy/beam"),
            "{n}"
        );
        let n = prefix_case_note("mjy/sr").unwrap();
        assert!(
            n.contains("read as mJy/sr") && n.contains("--unit MJy/sr"),
            "{n}"
        );
    }

    /// Negative powers written in capitals, as some FITS writers put a whole unit in upper
    /// case (`JY BEAM-1`, `MJY SR-1`, `BEAM-1 JY`), read as in lower case: the factor after the
    /// jansky in any case, the prefix by the rule for one-case units (mega when all upper
    /// case), which `prefix_case_note` names for these spellings too.
    #[test]
    fn reads_negative_powers_in_capitals() {
        let v = ExtinctionBand::V;
        let cases = [
            ("JY BEAM-1", PixelUnit::FluxPerBeam { to_si: JANSKY }),
            ("JY.BEAM-1", PixelUnit::FluxPerBeam { to_si: JANSKY }),
            ("JY BEAM**-1", PixelUnit::FluxPerBeam { to_si: JANSKY }),
            ("BEAM-1 JY", PixelUnit::FluxPerBeam { to_si: JANSKY }),
            ("Jy Beam-1", PixelUnit::FluxPerBeam { to_si: JANSKY }),
            (
                "mJy BEAM-1",
                PixelUnit::FluxPerBeam {
                    to_si: 1e-3 * JANSKY,
                },
            ),
            (
                "MJY SR-1",
                PixelUnit::SurfaceBrightness {
                    to_si: 1e6 * JANSKY,
                },
            ),
            (
                "MJY.SR-1",
                PixelUnit::SurfaceBrightness {
                    to_si: 1e6 * JANSKY,
                },
            ),
            (
                "SR-1 MJY",
                PixelUnit::SurfaceBrightness {
                    to_si: 1e6 * JANSKY,
                },
            ),
            (
                "MJY/SR",
                PixelUnit::SurfaceBrightness {
                    to_si: 1e6 * JANSKY,
                },
            ),
            ("JY/PIXEL", PixelUnit::FluxPerPixel { to_si: JANSKY }),
            ("JY/PIX", PixelUnit::FluxPerPixel { to_si: JANSKY }),
            ("JY PIXEL-1", PixelUnit::FluxPerPixel { to_si: JANSKY }),
            ("JY PIX-1", PixelUnit::FluxPerPixel { to_si: JANSKY }),
            ("PIXEL-1 JY", PixelUnit::FluxPerPixel { to_si: JANSKY }),
            (
                "mJy ARCSEC-2",
                PixelUnit::SurfaceBrightness {
                    to_si: 1e-3 * JANSKY / ARCSEC2,
                },
            ),
            (
                "ARCSEC-2 mJy",
                PixelUnit::SurfaceBrightness {
                    to_si: 1e-3 * JANSKY / ARCSEC2,
                },
            ),
            (
                "JY ARCMIN-2",
                PixelUnit::SurfaceBrightness {
                    to_si: JANSKY / ARCMIN2,
                },
            ),
            (
                "MJY DEG-2",
                PixelUnit::SurfaceBrightness {
                    to_si: 1e6 * JANSKY / DEG2,
                },
            ),
        ];
        for (s, unit) in cases {
            assert_eq!(parse_pixel_unit(s, v), Some(unit), "{s}");
            assert_eq!(parse_unit_option(s, v), Some((unit, s.into())), "{s}");
        }
        assert_eq!(
            canonical_unit(parse_pixel_unit("JY BEAM-1", v), ""),
            "Jy/beam"
        );
        assert_eq!(
            canonical_unit(parse_pixel_unit("MJY SR-1", v), ""),
            "MJy/sr"
        );
        assert_eq!(
            canonical_unit(parse_pixel_unit("JY PIXEL-1", v), ""),
            "Jy/pixel"
        );
        // Mega when all upper case: the usual unit per steradian says nothing, per beam or per
        // pixel or per square arcsecond the note names the reading and the other one, whichever
        // factor comes first and however the power is written.
        for s in [
            "MJY SR-1",
            "MJY.SR-1",
            "SR-1 MJY",
            "MJY SR**-1",
            "JY BEAM-1",
            "mJy BEAM-1",
        ] {
            assert_eq!(prefix_case_note(s), None, "{s}");
        }
        assert_eq!(
            parse_pixel_unit("MJY BEAM-1", v),
            Some(PixelUnit::FluxPerBeam {
                to_si: 1e6 * JANSKY
            })
        );
        for (s, read) in [
            ("MJY BEAM-1", "beam"),
            ("MJY.BEAM-1", "beam"),
            ("BEAM-1 MJY", "beam"),
            ("MJY PIXEL-1", "pixel"),
            ("MJY ARCSEC-2", "arcsec2"),
            ("ARCSEC-2 MJY", "arcsec2"),
        ] {
            let n = prefix_case_note(s).unwrap_or_else(|| panic!("{s}"));
            assert!(
                n.contains(&format!("BUNIT '{s}'"))
                    && n.contains(&format!("read as MJy/{read};"))
                    && n.contains(&format!("--unit mJy/{read}")),
                "{n}"
            );
        }
        // All lower case: milli, noted per steradian only.
        let n = prefix_case_note("mjy sr-1").unwrap();
        assert!(
            n.contains("read as mJy/sr;") && n.contains("--unit MJy/sr"),
            "{n}"
        );
        assert_eq!(prefix_case_note("mjy beam-1"), None);
        // Still not units cairn reads: other powers, no power, no jansky, other angles alone.
        for s in [
            "JY BEAM",
            "BEAM JY",
            "JY BEAM-2",
            "BEAM-2 JY",
            "JY SR-2",
            "JY/BEAM-1",
            "JY PX-1",
            "BEAM-1",
            "BEAM-1 K",
            "K BEAM-1",
            "K",
            "COUNTS",
            "DEG",
            "DEG-2",
            "JY DEG-1",
            "JY/DEG",
            "XJY BEAM-1",
        ] {
            assert_eq!(parse_pixel_unit(s, v), None, "{s}");
            assert_eq!(parse_unit_option(s, v), None, "{s}");
        }
    }

    /// An opacity is read in either of its usual spellings, with a slash or with a negative
    /// power (FITS Standard 4.0 sec. 4.3), in cm2/g or in m2/kg (1 m2/kg = 10 cm2/g).
    #[test]
    fn opacities_read_with_slashes_and_negative_powers_alike() {
        let q = |t: &str| parse_quantity(t, &[Opacity], "--opacity").map(|q| q.si);
        for (text, si) in [
            ("0.1cm2/g", 0.01),
            ("0.1cm2g-1", 0.01),
            ("0.1cm2 g-1", 0.01),
            ("0.01m2/kg", 0.01),
            ("0.01m2kg-1", 0.01),
            ("0.01m2 kg-1", 0.01),
        ] {
            let v = q(text).unwrap_or_else(|e| panic!("{text}: {e}"));
            assert!((v - si).abs() <= 1e-15 * si, "{text}: {v}");
        }
    }

    #[test]
    fn sums_over_pixels_keep_the_pixel_in_the_numerator() {
        assert_eq!(times_pixel("Jy/beam"), "Jy pixel/beam");
        assert_eq!(times_pixel("MJy/sr"), "MJy pixel/sr");
        assert_eq!(times_pixel("mJy/beam/km/s"), "mJy pixel/beam/km/s");
        assert_eq!(times_pixel("Jy/pixel"), "Jy");
        assert_eq!(times_pixel("cm-2"), "cm-2 pixel");
        assert_eq!(times_pixel("1/cm2"), "pixel/cm2");
        assert_eq!(times_pixel(""), "pixel");
    }

    /// Numbers in messages: the noise of binary fractions rounded away (common practice: ten
    /// significant digits are beyond any quantity a user gives).
    #[test]
    fn tidy_numbers_drop_binary_fraction_noise() {
        assert_eq!(tidy(400.00000000000006), "400");
        assert_eq!(tidy(0.1 + 0.2), "0.3");
        assert_eq!(tidy(0.05), "0.05");
        assert_eq!(tidy(3.0e21), "3e21");
        assert_eq!(tidy(-2.5e-7), "-2.5e-7");
        assert_eq!(tidy(0.0), "0");
        assert_eq!(tidy(f64::INFINITY), "inf");
    }

    #[test]
    fn parses_the_quantities_of_the_command_line() {
        let q = parse_quantity("18.2arcsec", &[Angle], "--beam").unwrap();
        assert!((q.si - 18.2 * ARCSEC).abs() < 1e-18);
        let q = parse_quantity("850um", &[Length, Frequency], "--wavelength").unwrap();
        assert!((q.si - 850e-6).abs() < 1e-18);
        let q = parse_quantity("300pc", &[Length], "--distance").unwrap();
        assert!((q.si / PARSEC - 300.0).abs() < 1e-12);
        assert_eq!(
            parse_quantity("12K", &[Temperature], "--temperature")
                .unwrap()
                .si,
            12.0
        );
        assert_eq!(
            parse_quantity("3sigma", &[Sigma, ColumnDensity], "--floor")
                .unwrap()
                .dim,
            Sigma
        );
        let q = parse_quantity("2e21cm-2", &[Sigma, ColumnDensity], "--floor").unwrap();
        assert_eq!(q.dim, ColumnDensity);
        assert!((q.si - 2e25).abs() < 1e10);
        let q = parse_quantity("2e21 cm^-2", &[ColumnDensity], "--floor").unwrap();
        assert!((q.si - 2e25).abs() < 1e10);
        let q = parse_quantity("0.3km/s", &[Speed], "--sigma-nt").unwrap();
        assert!((q.si - 300.0).abs() < 1e-12);
        assert_eq!(
            parse_quantity("3beam", &[Pixels, Beams, SolidAngle], "--min-area")
                .unwrap()
                .dim,
            Beams
        );
        assert_eq!(
            parse_quantity("-1.5e-3Jy/beam", &[FluxPerBeam], "--floor")
                .unwrap()
                .si,
            -1.5e-3 * JANSKY
        );
    }

    #[test]
    fn nonsense_gets_one_sentence_naming_option_and_example() {
        let e = parse_quantity("fast", &[Angle], "--beam").unwrap_err();
        assert!(e.starts_with("--beam 'fast' is not understood"), "{e}");
        assert!(e.contains("18.2arcsec"));
        let e = parse_quantity("12", &[Temperature], "--temperature").unwrap_err();
        assert!(e.contains("has no unit"), "{e}");
        let e = parse_quantity("12pc", &[Temperature], "--temperature").unwrap_err();
        assert!(e.contains("is a length"), "{e}");
        assert!(parse_quantity("1e999K", &[Temperature], "--temperature").is_err());
    }

    #[test]
    fn reads_bunit_spellings() {
        let v = ExtinctionBand::V;
        for s in [
            "cm-2",
            "cm^-2",
            "cm**-2",
            "1/cm2",
            "/cm2",
            "N(H2) cm-2",
            "cm-2 ",
        ] {
            assert_eq!(
                parse_pixel_unit(s, v),
                Some(PixelUnit::ColumnDensity { to_si: 1e4 }),
                "{s}"
            );
        }
        assert_eq!(
            parse_pixel_unit("m-2", v),
            Some(PixelUnit::ColumnDensity { to_si: 1.0 })
        );
        assert_eq!(
            parse_pixel_unit("mag", ExtinctionBand::K),
            Some(PixelUnit::Extinction {
                band: ExtinctionBand::K
            })
        );
        for s in ["MJy/sr", "MJy sr-1", "MJY/SR", "MJy/sr", "sr-1 MJy"] {
            assert_eq!(
                parse_pixel_unit(s, v),
                Some(PixelUnit::SurfaceBrightness {
                    to_si: 1e6 * JANSKY
                }),
                "{s}"
            );
        }
        for s in ["Jy/beam", "JY/BEAM", "Jy beam-1", "Jy/beam ", "beam-1 Jy"] {
            assert_eq!(
                parse_pixel_unit(s, v),
                Some(PixelUnit::FluxPerBeam { to_si: 1e-26 }),
                "{s}"
            );
        }
        for s in ["mJy/beam", "beam-1 mJy"] {
            assert_eq!(
                parse_pixel_unit(s, v),
                Some(PixelUnit::FluxPerBeam {
                    to_si: 1e-3 * JANSKY
                }),
                "{s}"
            );
        }
        for s in [
            "mJy/arcsec**2",
            "mJy/arcsec^2",
            "mJy/arcsec2",
            "mJy arcsec-2",
        ] {
            assert_eq!(
                parse_pixel_unit(s, v),
                Some(PixelUnit::SurfaceBrightness {
                    to_si: 1e-3 * JANSKY / ARCSEC2
                }),
                "{s}"
            );
        }
        assert_eq!(
            parse_pixel_unit("Jy/pixel", v),
            Some(PixelUnit::FluxPerPixel { to_si: 1e-26 })
        );
        assert_eq!(
            parse_pixel_unit("Jy/pix", v),
            Some(PixelUnit::FluxPerPixel { to_si: 1e-26 })
        );
        for s in [
            "",
            "K",
            "counts",
            "furlongs",
            "xJy/beam",
            "beam-1 K",
            "mJy arcsec2",
        ] {
            assert_eq!(parse_pixel_unit(s, v), None, "{s}");
        }
        // The jansky by its name (astropy 8.0.2 reads `Jansky/beam` as Jy/beam too).
        for s in ["Jansky/beam", "JANSKY/BEAM", "jansky/beam", "Jansky beam-1"] {
            assert_eq!(
                parse_pixel_unit(s, v),
                Some(PixelUnit::FluxPerBeam { to_si: 1e-26 }),
                "{s}"
            );
        }
        assert_eq!(
            parse_pixel_unit("MJansky/sr", v),
            parse_pixel_unit("MJy/sr", v)
        );
        // FITS's dimensionless unit (FITS Standard 4.0 sec. 4.3.1): no unit, structure only.
        assert_eq!(parse_pixel_unit("1", v), Some(PixelUnit::Other));
        assert_eq!(parse_pixel_unit(" 1 ", v), Some(PixelUnit::Other));
    }

    /// A jansky unit written as a product with its inverse factor first, as some writers put
    /// it (`beam-1 Jy`; FITS Standard 4.0 sec. 4.3 writes a product of factors separated by
    /// blanks or `.`, and astropy 8.0.2 reads `beam-1 Jy` as Jy/beam), is the same unit as
    /// with the factors the other way round, for every spelling read that way; a spelling
    /// refused one way round is refused the other way too.
    #[test]
    fn reads_a_product_with_its_inverse_factor_first() {
        let v = ExtinctionBand::V;
        for (first, last) in [
            ("beam-1 Jy", "Jy beam-1"),
            ("beam-1 mJy", "mJy beam-1"),
            ("beam-1 uJy", "uJy beam-1"),
            ("beam-1 Jansky", "Jansky beam-1"),
            ("beam^-1 Jy", "Jy beam^-1"),
            ("beam**-1 Jy", "Jy beam**-1"),
            ("beam-1.Jy", "Jy.beam-1"),
            ("  beam-1   Jy ", "Jy/beam"),
            ("sr-1 MJy", "MJy sr-1"),
            ("sr-1 Jy", "Jy sr-1"),
            ("sr-1 kJy", "kJy sr-1"),
            ("sr-1.MJy", "MJy.sr-1"),
            ("pixel-1 Jy", "Jy pixel-1"),
            ("pix-1 Jy", "Jy pix-1"),
            ("pixel-1 mJy", "mJy pixel-1"),
            ("arcsec-2 mJy", "mJy arcsec-2"),
            ("arcmin-2 Jy", "Jy arcmin-2"),
            ("deg-2 MJy", "MJy deg-2"),
            ("BEAM-1 JY", "JY BEAM-1"),
            ("SR-1 MJY", "MJY SR-1"),
            ("PIXEL-1.JY", "JY.PIXEL-1"),
        ] {
            let unit = parse_pixel_unit(first, v);
            assert!(unit.is_some(), "{first}");
            assert_eq!(unit, parse_pixel_unit(last, v), "{first} / {last}");
        }
        // Refused the one way round, refused the other (the steradian by name with a power,
        // `px` with a power).
        for (first, last) in [
            ("steradian-1 MJy", "MJy steradian-1"),
            ("px-1 Jy", "Jy px-1"),
        ] {
            assert_eq!(parse_pixel_unit(first, v), None, "{first}");
            assert_eq!(parse_pixel_unit(last, v), None, "{last}");
        }
        let per_beam = |to_si: f64| Some(PixelUnit::FluxPerBeam { to_si });
        assert_eq!(parse_pixel_unit("beam-1 Jy", v), per_beam(JANSKY));
        assert_eq!(parse_pixel_unit("beam-1 mJy", v), per_beam(1e-3 * JANSKY));
        assert_eq!(
            parse_pixel_unit("sr-1 MJy", v),
            Some(PixelUnit::SurfaceBrightness {
                to_si: 1e6 * JANSKY
            })
        );
        assert_eq!(
            parse_pixel_unit("pixel-1 Jy", v),
            Some(PixelUnit::FluxPerPixel { to_si: JANSKY })
        );
        assert_eq!(
            parse_unit_option("beam-1 Jy", v),
            Some((PixelUnit::FluxPerBeam { to_si: JANSKY }, "beam-1 Jy".into()))
        );
        // Only a unit the other way round: not three factors, an inverse alone, an inverse of
        // the jansky, a denominator written with '/', a power other than -1 (or -2 for the
        // square arcsecond), or a unit cairn does not convert.
        for s in [
            "beam-1",
            "beam-1 beam-1",
            "beam-1 Jy beam-1",
            "sr-1 Jy beam-1",
            "beam-1 sr-1 Jy",
            "beam-1 K",
            "beam-1 Jy-1",
            "Jy-1 beam",
            "/beam Jy",
            "1/beam Jy",
            "sr-1 Jy/beam",
            "beam-2 Jy",
            "sr-2 MJy",
            "beam-1 xJy",
            "kg-1 Jy",
            "s-1 K",
            "cm-2 Jy",
            "Jy beam",
            "beam Jy",
        ] {
            assert_eq!(parse_pixel_unit(s, v), None, "{s}");
            assert_eq!(parse_unit_option(s, v), None, "{s}");
        }
        // A one-case unit is noted whichever factor comes first, naming it as written.
        let n = prefix_case_note("sr-1 mjy").unwrap();
        assert!(
            n.contains("BUNIT 'sr-1 mjy'") && n.contains("read as mJy/sr"),
            "{n}"
        );
        assert_eq!(prefix_case_note("beam-1 mjy"), None);
        assert_eq!(prefix_case_note("sr-1 MJy"), None);
    }

    /// A surface brightness per square arcsecond (`mJy/arcsec**2`) in each FITS spelling of
    /// the power (FITS Standard 4.0 sec. 4.3: `**`, `^`, a bare digit, a negative power as a
    /// factor) is a surface brightness whose factor to SI is its prefix times the jansky over
    /// the square arcsecond in steradians.
    #[test]
    fn reads_a_surface_brightness_per_square_arcsecond() {
        let v = ExtinctionBand::V;
        let per_arcsec2 = |to_si: f64| Some(PixelUnit::SurfaceBrightness { to_si });
        for s in [
            "mJy/arcsec**2",
            "mJy/arcsec^2",
            "mJy/arcsec2",
            "mJy arcsec-2",
            "mJy arcsec^-2",
            "mJy arcsec**-2",
            "mJy.arcsec-2",
            "arcsec-2 mJy",
            "arcsec-2.mJy",
            "mJy/arcsec**2 ",
        ] {
            assert_eq!(
                parse_pixel_unit(s, v),
                per_arcsec2(1e-3 * JANSKY / ARCSEC2),
                "{s}"
            );
            assert_eq!(
                parse_unit_option(s, v).map(|(u, _)| u),
                per_arcsec2(1e-3 * JANSKY / ARCSEC2),
                "{s}"
            );
        }
        for (s, prefix) in [
            ("Jy/arcsec2", 1.0),
            ("Jy arcsec-2", 1.0),
            ("uJy/arcsec**2", 1e-6),
            ("uJy arcsec-2", 1e-6),
            ("µJy/arcsec2", 1e-6),
            ("kJy/arcsec2", 1e3),
        ] {
            assert_eq!(
                parse_pixel_unit(s, v),
                per_arcsec2(prefix * JANSKY / ARCSEC2),
                "{s}"
            );
        }
        // The arcsecond is pi/648000 rad (BIPM SI Brochure, 8th edition 2006, Table 6).
        assert!((ARCSEC / (std::f64::consts::PI / 648000.0) - 1.0).abs() <= f64::EPSILON);
        // 1 mJy/arcsec2 in SI and in MJy/sr: astropy 8.0.2 `(u.mJy / u.arcsec**2).si.scale`
        // gives 4.2545170296152204e-19 and `.to(u.MJy / u.sr)` 42.5451702961522; by hand,
        // 1e-3 (648000/pi)^2 / 1e6 = 42.54517029615221.
        let mjy_arcsec2 = parse_pixel_unit("mJy/arcsec**2", v)
            .unwrap()
            .to_si()
            .unwrap();
        let mjy_sr = parse_pixel_unit("MJy/sr", v).unwrap().to_si().unwrap();
        assert!((mjy_arcsec2 / 4.2545170296152204e-19 - 1.0).abs() < 1e-15);
        assert!((mjy_arcsec2 / mjy_sr / 42.54517029615221 - 1.0).abs() < 1e-15);
        // Not a surface brightness per square arcsecond: a product with the square arcsecond,
        // a power other than 2, another angle, the power on the jansky, or no jansky.
        for s in [
            "mJy arcsec2",
            "mJy arcsec**2",
            "arcsec2 mJy",
            "mJy/arcsec-2",
            "mJy/arcsec",
            "mJy arcsec-1",
            "arcsec-1 mJy",
            "mJy/arcsec3",
            "mJy/arcsec**3",
            "mJy/rad2",
            "mJy2/arcsec2",
            "arcsec-2",
            "K arcsec-2",
            "mJy/arcsec2/beam",
            "xJy/arcsec2",
        ] {
            assert_eq!(parse_pixel_unit(s, v), None, "{s}");
            assert_eq!(parse_unit_option(s, v), None, "{s}");
        }
        // In one case: mega when all upper case, which goes against the usual milli, so noted.
        assert_eq!(
            parse_pixel_unit("MJY/ARCSEC2", v),
            per_arcsec2(1e6 * JANSKY / ARCSEC2)
        );
        let n = prefix_case_note("MJY/ARCSEC**2").unwrap();
        assert!(
            n.contains("read as MJy/arcsec2") && n.contains("--unit mJy/arcsec2"),
            "{n}"
        );
        assert_eq!(prefix_case_note("mjy/arcsec2"), None);
        assert_eq!(prefix_case_note("mJy/arcsec2"), None);
    }

    /// A surface brightness per square arcminute or per square degree (`Jy/arcmin2`,
    /// `MJy/deg2`) in each FITS spelling of the power, as per square arcsecond, with its
    /// prefix times the jansky over the solid angle in steradians.
    #[test]
    fn reads_a_surface_brightness_per_square_arcminute_and_degree() {
        let v = ExtinctionBand::V;
        let per = |to_si: f64| Some(PixelUnit::SurfaceBrightness { to_si });
        for (s, to_si) in [
            ("Jy/arcmin2", JANSKY / ARCMIN2),
            ("Jy/arcmin**2", JANSKY / ARCMIN2),
            ("Jy/arcmin^2", JANSKY / ARCMIN2),
            ("Jy arcmin-2", JANSKY / ARCMIN2),
            ("Jy.arcmin**-2", JANSKY / ARCMIN2),
            ("arcmin-2 Jy", JANSKY / ARCMIN2),
            ("mJy/arcmin2", 1e-3 * JANSKY / ARCMIN2),
            ("mJy arcmin-2", 1e-3 * JANSKY / ARCMIN2),
            ("arcmin-2.mJy", 1e-3 * JANSKY / ARCMIN2),
            ("uJy/arcmin2", 1e-6 * JANSKY / ARCMIN2),
            ("MJy/deg2", 1e6 * JANSKY / DEG2),
            ("MJy/deg**2", 1e6 * JANSKY / DEG2),
            ("MJy deg-2", 1e6 * JANSKY / DEG2),
            ("deg-2 MJy", 1e6 * JANSKY / DEG2),
            ("kJy/deg2", 1e3 * JANSKY / DEG2),
            ("Jy/deg2", JANSKY / DEG2),
            ("Jy deg-2", JANSKY / DEG2),
            ("deg-2 Jy", JANSKY / DEG2),
            ("Jy deg^-2", JANSKY / DEG2),
            ("mJy/deg2", 1e-3 * JANSKY / DEG2),
        ] {
            assert_eq!(parse_pixel_unit(s, v), per(to_si), "{s}");
            assert_eq!(
                parse_unit_option(s, v),
                Some((per(to_si).unwrap(), s.into())),
                "{s}"
            );
        }
        // The minute of arc is pi/10800 rad, the degree pi/180 rad (BIPM SI Brochure, 8th
        // edition 2006, Table 6).
        let pi = std::f64::consts::PI;
        assert!((ARCMIN2 / (pi / 10800.0).powi(2) - 1.0).abs() <= 2.0 * f64::EPSILON);
        assert!((DEG2 / (pi / 180.0).powi(2) - 1.0).abs() <= 2.0 * f64::EPSILON);
        // In SI and in MJy/sr: astropy 8.0.2 gives `(u.Jy / u.arcmin**2).si.scale`
        // 1.181810286004228e-19 and `.to(u.MJy / u.sr)` 11.818102860042279, and
        // `(u.MJy / u.deg**2).si.scale` 3.282806350011744e-17 and `.to(u.MJy / u.sr)`
        // 3282.8063500117437; by hand 1e-6 (10800/pi)^2 = 11.818102860042279 and
        // (180/pi)^2 = 3282.806350011744. (The stored oracle, fixtures/segment/reference.json,
        // is compared in tests/segment_reference.rs.)
        let mjy_sr = parse_pixel_unit("MJy/sr", v).unwrap().to_si().unwrap();
        for (s, si, in_mjy_sr) in [
            ("Jy/arcmin2", 1.181810286004228e-19, 11.818102860042279),
            ("MJy/deg2", 3.282806350011744e-17, 3282.806350011744),
        ] {
            let got = parse_pixel_unit(s, v).unwrap().to_si().unwrap();
            assert!((got / si - 1.0).abs() < 1e-15, "{s}: {got}");
            assert!((got / mjy_sr / in_mjy_sr - 1.0).abs() < 1e-15, "{s}: {got}");
        }
        // Not these units: a product with the solid angle, another power, the angle alone or
        // with a power on the jansky, no jansky.
        for s in [
            "Jy arcmin2",
            "arcmin2 Jy",
            "Jy/arcmin",
            "Jy/arcmin-2",
            "Jy arcmin-1",
            "arcmin-1 Jy",
            "Jy/arcmin3",
            "MJy deg2",
            "deg2 MJy",
            "MJy/deg",
            "MJy deg-1",
            "deg-1 MJy",
            "MJy/deg**3",
            "MJy deg-3",
            "MJy2/deg2",
            "deg",
            "deg2",
            "deg-2",
            "arcmin-2",
            "K deg-2",
            "K/arcmin2",
            "counts/deg2",
            "MJy/deg2/beam",
            "xJy/deg2",
        ] {
            assert_eq!(parse_pixel_unit(s, v), None, "{s}");
            assert_eq!(parse_unit_option(s, v), None, "{s}");
        }
        // In capitals: mega, with the note of a one-case unit read against the usual milli.
        assert_eq!(parse_pixel_unit("MJY/DEG2", v), per(1e6 * JANSKY / DEG2));
        let n = prefix_case_note("MJY/ARCMIN**2").unwrap();
        assert!(
            n.contains("read as MJy/arcmin2;") && n.contains("--unit mJy/arcmin2"),
            "{n}"
        );
        assert_eq!(prefix_case_note("MJy/deg2"), None);
        assert_eq!(prefix_case_note("mJy/arcmin2"), None);
    }

    /// Levels typed per square arcminute or degree: in the map's own unit, the decimal typed;
    /// on a map in MJy/sr, converted by the same factor as the map's unit.
    #[test]
    fn levels_per_square_arcminute_and_degree_convert_to_mjy_per_sr() {
        let v = ExtinctionBand::V;
        let per_sr = parse_pixel_unit("MJy/sr", v);
        for (map_unit, texts, in_mjy_sr) in [
            (
                "Jy/arcmin2",
                [
                    "0.5Jy/arcmin2",
                    "0.5Jy/arcmin**2",
                    "0.5Jy arcmin-2",
                    "500mJy/arcmin2",
                ],
                11.818102860042279,
            ),
            (
                "MJy/deg2",
                [
                    "0.5MJy/deg2",
                    "0.5MJy/deg**2",
                    "0.5MJy deg-2",
                    "500kJy/deg2",
                ],
                3282.806350011744,
            ),
        ] {
            let own = parse_pixel_unit(map_unit, v);
            for text in texts {
                assert_eq!(parse_map_value(text, own, "--floor"), Ok(0.5), "{text}");
                let got = parse_map_value(text, per_sr, "--floor").unwrap();
                assert!(
                    (got / (0.5 * in_mjy_sr) - 1.0).abs() < 1e-15,
                    "{text}: {got}"
                );
            }
        }
        assert_eq!(
            parse_map_value(
                "2e3uJy/arcmin2",
                parse_pixel_unit("mJy/arcmin2", v),
                "--noise"
            ),
            Ok(2.0)
        );
        assert_eq!(
            parse_map_value("2e-3Jy/deg2", parse_pixel_unit("mJy/deg2", v), "--noise"),
            Ok(2.0)
        );
        assert!(
            parse_quantity("0.5Jy/deg", &[SurfaceBrightness], "--floor")
                .unwrap_err()
                .contains("not understood")
        );
    }

    /// Levels typed per square arcsecond: in the map's own unit, the decimal typed; on a map in
    /// MJy/sr, converted by the same factor as the map's unit (and the reverse).
    #[test]
    fn levels_per_square_arcsecond_convert_to_and_from_mjy_per_sr() {
        let v = ExtinctionBand::V;
        let per_arcsec2 = parse_pixel_unit("mJy/arcsec2", v);
        let per_sr = parse_pixel_unit("MJy/sr", v);
        for text in ["0.5mJy/arcsec2", "0.5mJy/arcsec**2", "0.5mJy arcsec-2"] {
            assert_eq!(parse_map_value(text, per_arcsec2, "--floor"), Ok(0.5));
            let got = parse_map_value(text, per_sr, "--floor").unwrap();
            assert!(
                (got / (0.5 * 42.54517029615221) - 1.0).abs() < 1e-15,
                "{got}"
            );
        }
        assert_eq!(
            parse_map_value("2e3uJy/arcsec2", per_arcsec2, "--noise"),
            Ok(2.0)
        );
        assert_eq!(
            parse_map_value("2e-3Jy/arcsec2", per_arcsec2, "--noise"),
            Ok(2.0)
        );
        let got = parse_map_value("42.54517029615221MJy/sr", per_arcsec2, "--floor").unwrap();
        assert!((got - 1.0).abs() < 1e-15, "{got}");
        assert!(
            parse_map_value(
                "0.5mJy/arcsec2",
                Some(PixelUnit::ColumnDensity { to_si: 1e4 }),
                "--floor"
            )
            .is_err()
        );
        assert!(
            parse_quantity("0.5mJy/arcsec3", &[SurfaceBrightness], "--floor")
                .unwrap_err()
                .contains("not understood")
        );
    }

    /// Every spelling cairn reads is written in the outputs as the canonical unit of its kind,
    /// which cairn reads back as the same unit (the outputs of a run describe the run), and
    /// which FITS and VO unit parsers read (checked against astropy 8.0.2 in
    /// tests/segment_reference.rs).
    #[test]
    fn outputs_use_one_canonical_spelling_per_unit() {
        let cases = [
            ("cm-2", "cm-2"),
            ("CM-2", "cm-2"),
            ("1/cm2", "cm-2"),
            ("cm^-2", "cm-2"),
            ("N(H2) cm-2", "cm-2"),
            ("m-2", "m-2"),
            ("mag", "mag"),
            ("Mag", "mag"),
            ("magnitudes", "mag"),
            ("mag(AK)", "mag"),
            ("mag(AV)", "mag"),
            ("A_V", "mag"),
            ("MJy/sr", "MJy/sr"),
            ("MJY/SR", "MJy/sr"),
            ("MJy/steradian", "MJy/sr"),
            ("MJy.sr-1", "MJy/sr"),
            ("Jy/sr", "Jy/sr"),
            ("kJy/sr", "kJy/sr"),
            ("Jy/beam", "Jy/beam"),
            ("JY/BEAM", "Jy/beam"),
            ("Jy/Beam", "Jy/beam"),
            ("jy/beam", "Jy/beam"),
            ("Jansky/beam", "Jy/beam"),
            ("JANSKY/BEAM", "Jy/beam"),
            ("mJy/beam", "mJy/beam"),
            ("MJY/BEAM", "MJy/beam"),
            ("uJy/beam", "uJy/beam"),
            ("Jy/pixel", "Jy/pixel"),
            ("Jy/pix", "Jy/pixel"),
            ("beam-1 Jy", "Jy/beam"),
            ("beam-1 mJy", "mJy/beam"),
            ("sr-1 MJy", "MJy/sr"),
            ("pixel-1 Jy", "Jy/pixel"),
            ("mJy/arcsec**2", "mJy/arcsec2"),
            ("mJy/arcsec^2", "mJy/arcsec2"),
            ("mJy arcsec-2", "mJy/arcsec2"),
            ("arcsec-2 mJy", "mJy/arcsec2"),
            ("Jy/arcsec2", "Jy/arcsec2"),
            ("uJy/arcsec2", "uJy/arcsec2"),
            ("MJY/ARCSEC2", "MJy/arcsec2"),
            ("Jy/arcmin2", "Jy/arcmin2"),
            ("Jy/arcmin**2", "Jy/arcmin2"),
            ("mJy arcmin-2", "mJy/arcmin2"),
            ("arcmin-2 uJy", "uJy/arcmin2"),
            ("MJy/deg2", "MJy/deg2"),
            ("MJy deg-2", "MJy/deg2"),
            ("deg-2 Jy", "Jy/deg2"),
            ("Jy deg-2", "Jy/deg2"),
            ("kJy/deg**2", "kJy/deg2"),
            ("MJY/DEG2", "MJy/deg2"),
            ("JY BEAM-1", "Jy/beam"),
            ("JY.BEAM-1", "Jy/beam"),
            ("BEAM-1 JY", "Jy/beam"),
            ("MJY SR-1", "MJy/sr"),
            ("JY/PIXEL", "Jy/pixel"),
            ("JY PIXEL-1", "Jy/pixel"),
            ("mJy ARCSEC-2", "mJy/arcsec2"),
            ("1", ""),
        ];
        for band in [ExtinctionBand::V, ExtinctionBand::K] {
            for (spelling, canonical) in cases {
                let unit = parse_pixel_unit(spelling, band);
                assert!(unit.is_some(), "{spelling}");
                assert_eq!(canonical_unit(unit, spelling), canonical, "{spelling}");
                // Read back: the same unit (an extinction's band is the map's, not the unit's).
                let back = if canonical.is_empty() {
                    Some(PixelUnit::Other)
                } else {
                    parse_pixel_unit(canonical, band)
                };
                match unit {
                    Some(PixelUnit::Extinction { .. }) => {
                        assert!(matches!(back, Some(PixelUnit::Extinction { .. })))
                    }
                    _ => assert_eq!(back, unit, "{spelling} -> {canonical}"),
                }
            }
        }
        // A unit cairn does not convert stays as written.
        assert_eq!(canonical_unit(Some(PixelUnit::Other), " K km/s "), "K km/s");
        assert_eq!(canonical_unit(Some(PixelUnit::Other), ""), "");
        assert_eq!(canonical_unit(None, ""), "");
    }

    #[test]
    fn unit_option_names_units_without_conversion_explicitly() {
        let v = ExtinctionBand::V;
        // A unit cairn converts keeps its text; `other:` and `none` give a map measured for
        // its structure only, in the text after the prefix (or no unit).
        assert_eq!(
            parse_unit_option(" MJy/sr ", v),
            Some((
                PixelUnit::SurfaceBrightness {
                    to_si: 1e6 * JANSKY
                },
                "MJy/sr".into()
            ))
        );
        assert_eq!(
            parse_unit_option("other:K km/s", v),
            Some((PixelUnit::Other, "K km/s".into()))
        );
        assert_eq!(
            parse_unit_option("OTHER: K.km.s-1", v),
            Some((PixelUnit::Other, "K.km.s-1".into()))
        );
        assert_eq!(
            parse_unit_option("none", v),
            Some((PixelUnit::Other, String::new()))
        );
        assert_eq!(
            parse_unit_option("other:", v),
            Some((PixelUnit::Other, String::new()))
        );
        // A bare unit cairn does not convert, or a misspelt one, is no choice of either kind.
        for s in ["K", "K km/s", "MJy/str", ""] {
            assert_eq!(parse_unit_option(s, v), None, "{s}");
        }
    }
}

/// Parses a value in the units of a map's pixels: a plain number is taken in the map's own
/// unit (its BUNIT); a quantity with a unit of the same kind is converted to it.
pub fn parse_map_value(text: &str, unit: Option<PixelUnit>, what: &str) -> Result<f64, String> {
    let dims: &[Dimension] = match unit {
        Some(PixelUnit::ColumnDensity { .. }) => &[Dimension::Pure, Dimension::ColumnDensity],
        Some(PixelUnit::Extinction { .. }) => &[Dimension::Pure, Dimension::Magnitude],
        Some(PixelUnit::SurfaceBrightness { .. }) => {
            &[Dimension::Pure, Dimension::SurfaceBrightness]
        }
        Some(PixelUnit::FluxPerBeam { .. }) => &[Dimension::Pure, Dimension::FluxPerBeam],
        Some(PixelUnit::FluxPerPixel { .. }) => &[Dimension::Pure, Dimension::FluxPerPixel],
        // cairn knows no other unit of such a map, so only plain numbers are in its unit.
        Some(PixelUnit::Other) | None => &[Dimension::Pure],
    };
    let q = parse_quantity(text, dims, what)?;
    let to_si = match unit {
        Some(PixelUnit::ColumnDensity { to_si })
        | Some(PixelUnit::SurfaceBrightness { to_si })
        | Some(PixelUnit::FluxPerBeam { to_si })
        | Some(PixelUnit::FluxPerPixel { to_si }) => to_si,
        Some(PixelUnit::Extinction { .. }) | Some(PixelUnit::Other) | None => 1.0,
    };
    Ok(if q.dim == Dimension::Pure {
        q.si
    } else {
        q.in_unit(to_si)
    })
}

#[cfg(test)]
mod map_value_tests {
    use super::*;

    #[test]
    fn map_values_convert_to_the_map_unit() {
        let mjy = Some(PixelUnit::SurfaceBrightness {
            to_si: 1e6 * JANSKY,
        });
        assert_eq!(parse_map_value("2.5", mjy, "--noise").unwrap(), 2.5);
        assert!((parse_map_value("3e6Jy/sr", mjy, "--noise").unwrap() - 3.0).abs() < 1e-12);
        let col = Some(PixelUnit::ColumnDensity { to_si: 1e4 });
        // A value in the map's own unit, or a power of ten from it, is the decimal given.
        assert_eq!(parse_map_value("2e21cm-2", col, "--floor").unwrap(), 2e21);
        assert_eq!(parse_map_value("3e6Jy/sr", mjy, "--noise").unwrap(), 3.0);
        assert_eq!(parse_map_value("0.3e25m-2", col, "--floor").unwrap(), 3e20);
        assert_eq!(
            parse_map_value("7e-3MJy/sr", mjy, "--noise").unwrap(),
            0.007
        );
        assert!(parse_map_value("2e21cm-2", mjy, "--floor").is_err());
    }
}

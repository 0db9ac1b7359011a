//! `cairn inspect`: what a map is, in words and as JSON.
//!
//! Owns the summary of a loaded map (HDU, shape, data type, what the unit is understood as,
//! sky frame and projection, centre, pixel scale, beam, wavelength, value range, missing
//! fraction, noise estimates) and the suggested thresholds for `segment`, which follow common
//! practice: a floor 3 noise widths above the clipped median (the background level), a
//! prominence of 3 noise widths, and a minimum area of one beam ([`default_min_area_px`],
//! the rule `segment` refuses a beam larger than the map by). Scales are taken at the map
//! centre, or, when that lies off the sky, at [`crate::wcs::Wcs::scale_pixel`], which is
//! named.
//! The JSON keys are documented in the README.

use std::path::Path;

use serde::Serialize;

use crate::angles;
use crate::error::{Error, Result};
use crate::map::{self, LoadOptions, Map, Source};
use crate::noise;
use crate::units;
use crate::wcs::SkyFrame;

/// How the noise was set.
#[derive(Debug, Clone)]
pub enum NoiseChoice {
    /// Estimated from the map.
    Estimate,
    /// Given as one value in map units (`--noise`).
    Value(f64),
    /// Given as a map of the same grid (`--noise-map`).
    Map(std::path::PathBuf),
}

/// Sky-coordinate facts of a map.
#[derive(Debug, Clone, Serialize)]
pub struct SkySummary {
    /// Frame: "ICRS", "FK5 J2000", "galactic", ...
    pub frame: String,
    /// Projection code, such as "TAN".
    pub projection: String,
    /// Distortion convention applied before the projection ("SIP"), if any.
    pub distortion: Option<String>,
    /// Longitude (RA or l) of the map centre in degrees (null when the centre lies off the
    /// sky, outside the projection's domain).
    pub centre_lon_deg: Option<f64>,
    /// Latitude (Dec or b) of the map centre in degrees (null likewise).
    pub centre_lat_deg: Option<f64>,
    /// The centre as text (sexagesimal for equatorial frames; null likewise).
    pub centre_text: Option<String>,
    /// Why the centre or the pixel scale is missing, when one is.
    pub why_none: Option<String>,
    /// The zero-based pixel [x, y] where the pixel scale, the solid angle and the beam in
    /// pixels are taken ([`crate::wcs::Wcs::scale_pixel`]): the map centre, or, when that
    /// lies off the sky, the reference pixel or the pixel on the sky nearest it (null when
    /// no pixel is on the sky).
    pub scale_pixel: Option<[f64; 2]>,
    /// Which pixel `scale_pixel` is: "centre", "reference pixel" or "nearest the reference
    /// pixel" (null without one).
    pub scale_pixel_is: Option<String>,
    /// Longitude and latitude of `scale_pixel` in degrees (null without one).
    pub scale_pixel_lon_lat_deg: Option<[f64; 2]>,
    /// Angular size of a pixel step along x and y at `scale_pixel`, in arcsec.
    pub pixel_scale_arcsec: Option<[f64; 2]>,
    /// Solid angle of the pixel at `scale_pixel` in steradians.
    pub pixel_solid_angle_sr: Option<f64>,
}

/// The beam, in arcsec and in pixels.
#[derive(Debug, Clone, Serialize)]
pub struct BeamSummary {
    /// Major-axis FWHM in arcsec.
    pub major_arcsec: f64,
    /// Minor-axis FWHM in arcsec.
    pub minor_arcsec: f64,
    /// Position angle in degrees east of north.
    pub pa_deg: f64,
    /// Major-axis FWHM in pixels (at the scale pixel, [`SkySummary::scale_pixel`]), when the
    /// map has a WCS with a pixel on the sky: in sides of a square pixel of the pixel's solid
    /// angle, so that pi/(4 ln 2) major minor is [`BeamSummary::area_px`] on any pixels.
    pub major_px: Option<f64>,
    /// Minor-axis FWHM in pixels.
    pub minor_px: Option<f64>,
    /// Beam solid angle (pi/(4 ln 2) major minor) in pixels.
    pub area_px: Option<f64>,
    /// "header" or "option".
    pub source: Source,
}

/// Wavelength and frequency.
#[derive(Debug, Clone, Serialize)]
pub struct WavelengthSummary {
    /// Wavelength in micrometres.
    pub wavelength_um: f64,
    /// Frequency in GHz.
    pub frequency_ghz: f64,
    /// "header" or "option".
    pub source: Source,
}

/// Pixel values.
#[derive(Debug, Clone, Serialize)]
pub struct ValueSummary {
    /// Smallest finite value (null if none).
    pub min: Option<f64>,
    /// Largest finite value.
    pub max: Option<f64>,
    /// All pixels.
    pub n_pixels: usize,
    /// Missing pixels (NaN or BLANK).
    pub n_missing: usize,
    /// n_missing / n_pixels.
    pub fraction_missing: f64,
}

/// Noise, in map units.
#[derive(Debug, Clone, Serialize)]
pub struct NoiseSummary {
    /// The noise that `segment` would use (null when none can be had).
    pub sigma: Option<f64>,
    /// "estimate" (clipped statistics of the map minus a box-median background), "--noise" or
    /// "--noise-map (median)".
    pub source: String,
    /// Clipped statistics of the map itself (its median is the background level used by the
    /// suggested floor), when they could be made.
    pub clipped: Option<noise::ClippedStats>,
    /// The difference (DER_SNR) estimate, when it could be made.
    pub difference_sigma: Option<f64>,
    /// Why no estimate could be made, when none could.
    pub why_none: Option<String>,
}

/// Thresholds suggested as a starting point for `segment`.
#[derive(Debug, Clone, Serialize)]
pub struct Suggested {
    /// Floor in map units.
    pub floor: f64,
    /// Prominence in map units.
    pub prominence: f64,
    /// Minimum area in pixels: one beam, or 9 pixels without a beam (null when one beam is
    /// more than the whole map, which `segment` refuses: a warning says so).
    pub min_area_px: Option<f64>,
    /// The floor as an H2 column density, cm^-2, by the conversion `segment` would use (at
    /// the map centre; null without one).
    pub floor_column_cm2: Option<f64>,
    /// The floor as a visual extinction, mag, by the same conversion and the N(H2) per A_V
    /// assumed (null without a conversion).
    pub floor_av_mag: Option<f64>,
}

/// The conversion `segment` would use from map units to H2 column density and mass.
#[derive(Debug, Clone, Serialize)]
pub struct ConversionSummary {
    /// N(H2) in cm^-2 per map unit at the map centre, or at the scale pixel when the centre
    /// lies off the sky (null when no conversion is possible).
    pub column_per_unit_cm2: Option<f64>,
    /// Gas mass in M_sun of one pixel at the scale pixel holding one map unit (null without a
    /// distance or a pixel on the sky).
    pub mass_per_unit_pixel_msun: Option<f64>,
    /// The assumptions used, in words.
    pub assumptions: Vec<String>,
    /// Why there is no conversion, when there is none.
    pub why_none: Option<String>,
}

/// Everything `inspect` reports.
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    /// The file.
    pub file: String,
    /// Zero-based HDU index.
    pub hdu: usize,
    /// EXTNAME of the HDU.
    pub hdu_name: Option<String>,
    /// [nx, ny] of the 2-D map.
    pub shape: [usize; 2],
    /// Axis lengths as stored (NAXIS1, NAXIS2, ...).
    pub stored_axes: Vec<usize>,
    /// Plane taken from a cube.
    pub plane: Option<usize>,
    /// BITPIX of the stored data.
    pub bitpix: i64,
    /// BITPIX in words.
    pub data_type: String,
    /// The unit as written.
    pub unit: String,
    /// What the unit is understood as (null if not understood).
    pub unit_kind: Option<String>,
    /// "header" or "option".
    pub unit_source: Source,
    /// Sky coordinates (null without a celestial WCS).
    pub sky: Option<SkySummary>,
    /// Beam (null if unknown).
    pub beam: Option<BeamSummary>,
    /// Wavelength (null if unknown).
    pub wavelength: Option<WavelengthSummary>,
    /// Value range and missing pixels.
    pub values: ValueSummary,
    /// Noise.
    pub noise: NoiseSummary,
    /// Suggested thresholds (null without a noise).
    pub suggested: Option<Suggested>,
    /// Conversion to column density and mass.
    pub conversion: ConversionSummary,
    /// Warnings.
    pub warnings: Vec<String>,
}

/// A frame's name in sentences: ICRS, FK5 J2000, FK4 B1950, galactic, ecliptic, or the
/// CTYPE pair of any other.
pub(crate) fn frame_name(f: &SkyFrame) -> String {
    match f {
        SkyFrame::Icrs => "ICRS".into(),
        SkyFrame::Fk5 { equinox } => format!("FK5 J{equinox}"),
        SkyFrame::Fk4 { equinox } => format!("FK4 B{equinox}"),
        SkyFrame::Galactic => "galactic".into(),
        SkyFrame::Ecliptic => "ecliptic".into(),
        SkyFrame::Other(s) => s.clone(),
    }
}

fn data_type(bitpix: i64) -> String {
    let w = match bitpix {
        8 => "8-bit unsigned integer",
        16 => "16-bit integer",
        32 => "32-bit integer",
        64 => "64-bit integer",
        -32 => "32-bit float",
        -64 => "64-bit float",
        _ => "unknown",
    };
    format!("{w} (BITPIX {bitpix})")
}

/// The noise used for `choice` on `map`: (sigma in map units, description).
pub fn noise_for(map: &Map, choice: &NoiseChoice) -> Result<(Option<f64>, String)> {
    noise_for_with(map, choice, None)
}

/// [`noise_for`], with the noise map of a [`NoiseChoice::Map`] already loaded (`loaded`), so
/// that a caller who needs the map itself reads it once.
pub fn noise_for_with(
    map: &Map,
    choice: &NoiseChoice,
    loaded: Option<ndarray::ArrayView2<f32>>,
) -> Result<(Option<f64>, String)> {
    match choice {
        NoiseChoice::Value(v) => {
            if !(*v > 0.0 && v.is_finite()) {
                return Err(Error::usage(format!(
                    "--noise must be a positive number in map units, not {v}."
                )));
            }
            Ok((Some(*v), "--noise".into()))
        }
        NoiseChoice::Map(path) => {
            let owned;
            let nm = match loaded {
                Some(v) => v,
                None => {
                    owned = load_noise_map(map, path)?;
                    owned.view()
                }
            };
            let mut vals = noise::finite_sample(nm);
            if vals.is_empty() {
                return Err(Error::input(
                    path,
                    "has no finite pixels to use as noise; check the file.",
                ));
            }
            Ok((
                Some(noise::median_in_place(&mut vals)),
                "--noise-map (median)".into(),
            ))
        }
        NoiseChoice::Estimate => match noise::residual_stats(map.data.view(), noise_box_px(map)) {
            Ok(c) => Ok((Some(c.std), "estimate".into())),
            Err(_) => Ok((None, "estimate".into())),
        },
    }
}

/// A sentence questioning a noise given (`--noise`, or the median `sigma` of a `--noise-map`)
/// a hundred times or more away from the map's own pixel-difference estimate `difference`
/// ([`noise::difference_sigma`]): most likely another unit (4 meant as mJy/beam on a map in
/// Jy/beam), which every level in sigma, the default thresholds and the error columns would
/// carry. The differences underestimate noise correlated by a beam of several pixels, by up
/// to some tens for the widest beams, hence the wide margin. None for the estimate itself,
/// and for a noise within the margin. Shared by `inspect` and `segment`.
pub fn noise_given_warning(
    map: &Map,
    choice: &NoiseChoice,
    sigma: f64,
    difference: f64,
) -> Option<String> {
    let ratio = sigma / difference;
    if !(difference > 0.0 && sigma > 0.0 && ratio.is_finite()) || (0.01..=100.0).contains(&ratio) {
        return None;
    }
    // The ratio in words: a whole number up to ten thousand, beyond in scientific notation.
    let how = if ratio >= 1.0 {
        if ratio < 1e4 {
            format!("about {} times", ratio.round())
        } else {
            format!("about {ratio:.1e} times")
        }
    } else if ratio > 1e-4 {
        format!("about 1/{} of", (1.0 / ratio).round())
    } else {
        format!("about {ratio:.1e} times")
    };
    let unit = match map.unit_text.trim() {
        "" => String::new(),
        u => format!(", {u}"),
    };
    let what = match choice {
        NoiseChoice::Value(_) => format!(
            "the noise given ({}) is {how} the pixel-difference estimate (about {difference:.1e}); check its unit (a bare --noise is in the map's unit{unit})",
            units::tidy(sigma)
        ),
        NoiseChoice::Map(p) => format!(
            "the noise map {} (median {}) is {how} the pixel-difference estimate (about {difference:.1e}); check its unit (a noise map without BUNIT is read in the map's unit{unit})",
            p.display(),
            // The median of a map of 32-bit floats, in its shortest form when it is one.
            if sigma == sigma as f32 as f64 {
                units::tidy_f32(sigma as f32)
            } else {
                units::tidy(sigma)
            }
        ),
        NoiseChoice::Estimate => return None,
    };
    Some(format!(
        "{what}, since levels in sigma, the default thresholds and the error columns scale with it"
    ))
}

/// The pixel where a map's scales are taken ([`crate::wcs::Wcs::scale_pixel`]): its centre,
/// or the pixel on the sky nearest it; `None` without a celestial WCS or a pixel on the sky.
pub fn scale_pixel(map: &Map) -> Option<(f64, f64)> {
    map.wcs.as_ref()?.scale_pixel(map.nx(), map.ny())
}

/// The beam's solid angle in pixels, at the map's [`scale_pixel`]; `None` without a beam, a
/// celestial WCS or a pixel on the sky.
pub fn beam_area_px(map: &Map) -> Option<f64> {
    let (b, w) = (map.beam?, map.wcs.as_ref()?);
    let (x, y) = scale_pixel(map)?;
    Some(b.solid_angle_sr() / w.pixel_solid_angle(x, y))
}

/// Why the map's beam leaves nothing to find, if it does: one beam ([`beam_area_px`]) larger
/// than the whole map. For a beam of a degree or more from the header, the likely cause is
/// said: BMAJ and BMIN are in degrees, and a beam written in arcsec reads 3600 times too wide.
pub fn beam_too_large(map: &Map) -> Option<String> {
    let area = beam_area_px(map)?;
    let n = map.nx() * map.ny();
    if area <= n as f64 {
        return None;
    }
    // In the words of the value itself: a count beyond 2^64 would read as its cap.
    let shown = if area < 1e15 {
        format!("{}", (area - 1e-9).ceil().max(1.0) as usize)
    } else {
        format!("{area:.3e}")
    };
    let path = map.path.display();
    Some(match (map.beam_source, map.beam) {
        (Some(Source::Header), Some(b)) if b.major_deg >= 1.0 => format!(
            "one beam ({shown} pixels) is larger than the whole map {path} ({n} pixels): check the header's beam (BMAJ and BMIN are in degrees, as FITS defines them: {} deg is {}\"; a beam written in arcsec reads 3600 times too wide) or give --beam",
            units::tidy(b.major_deg),
            units::tidy(b.major_deg * 3600.0)
        ),
        (Some(Source::Option), _) => format!(
            "one beam ({shown} pixels) is larger than the whole map {path} ({n} pixels): check --beam"
        ),
        _ => format!(
            "the map {path} ({n} pixel{}) is smaller than one beam ({shown} pixels), too small to hold a structure the beam resolves: give a larger map, or check the beam (BMAJ and BMIN, in degrees) or give --beam",
            if n == 1 { "" } else { "s" }
        ),
    })
}

/// The default least area of a leaf, in pixels, as `segment` takes it: one beam
/// ([`beam_area_px`], rounded up), or 9 pixels (a 3 x 3 patch, common practice) without a
/// beam; never less than 1. One beam larger than the whole map is refused in the words of
/// [`beam_too_large`] (and `segment` refuses such a map whatever `--min-area`).
pub fn default_min_area_px(map: &Map) -> std::result::Result<usize, String> {
    if let Some(why) = beam_too_large(map) {
        return Err(format!("{why}."));
    }
    let beam = beam_area_px(map);
    let area = beam.unwrap_or(9.0);
    let px = (area - 1e-9).ceil().max(1.0) as usize;
    let n = map.nx() * map.ny();
    if px <= n {
        return Ok(px);
    }
    Err(format!(
        "the default --min-area without a beam, 9 pixels (a 3 x 3 patch), is larger than the whole map {} ({n} pixels); give --min-area in px.",
        map.path.display()
    ))
}

/// The box size of the residual noise estimate: five beams, or 32 pixels without a beam (or
/// with one larger than the map).
pub fn noise_box_px(map: &Map) -> usize {
    // A beam larger than the map (see [`beam_too_large`]) says nothing of the noise's scale.
    let beam = map.beam.filter(|_| beam_too_large(map).is_none());
    let beam_px = match (beam, &map.wcs, scale_pixel(map)) {
        (Some(b), Some(w), Some((x, y))) => {
            let (sx, sy) = w.pixel_scale(x, y);
            Some(b.major_deg / (sx * sy).sqrt())
        }
        _ => None,
    };
    beam_px
        .map(|b| (5.0 * b).round() as usize)
        .unwrap_or(32)
        .max(8)
}

/// Loads a noise map and checks it lies on the same grid as `map`.
pub fn load_noise_map(map: &Map, path: &Path) -> Result<ndarray::Array2<f32>> {
    load_aux_map(
        map,
        path,
        "noise map",
        "noise values",
        false,
        AuxUnit::OfMap,
    )
}

/// Angle in degrees between two (longitude, latitude) positions in degrees (haversine).
fn separation_deg(a: (f64, f64), b: (f64, f64)) -> f64 {
    let (l1, b1) = (a.0.to_radians(), a.1.to_radians());
    let (l2, b2) = (b.0.to_radians(), b.1.to_radians());
    let h = ((b2 - b1) / 2.0).sin().powi(2) + b1.cos() * b2.cos() * ((l2 - l1) / 2.0).sin().powi(2);
    (2.0 * h.sqrt().min(1.0).asin()).to_degrees()
}

/// The unit an auxiliary map's values must be in.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AuxUnit {
    /// The map's own unit (a noise map); another unit of the same kind is converted (a noise
    /// map in mJy/beam beside a map in Jy/beam).
    OfMap,
    /// Kelvin (a temperature map).
    Kelvin,
    /// A speed, returned in km/s (a velocity-dispersion map; converted from m/s and the like).
    KmPerS,
}

/// The factor that turns values in the auxiliary map's BUNIT (`aux`, trimmed, not empty) into
/// the unit `expect` calls for, or why they cannot be.
fn aux_factor(
    map: &Map,
    aux: &Map,
    bunit: &str,
    expect: AuxUnit,
) -> std::result::Result<f64, String> {
    use units::PixelUnit as P;
    match expect {
        AuxUnit::Kelvin => {
            if bunit == "K" {
                Ok(1.0)
            } else {
                Err("K".into())
            }
        }
        AuxUnit::KmPerS => {
            units::parse_quantity(&format!("1{bunit}"), &[units::Dimension::Speed], "BUNIT")
                .map(|q| q.si / 1e3)
                .map_err(|_| "a speed such as km/s".into())
        }
        AuxUnit::OfMap => {
            let si = |u: &P| match *u {
                P::ColumnDensity { to_si }
                | P::SurfaceBrightness { to_si }
                | P::FluxPerBeam { to_si }
                | P::FluxPerPixel { to_si } => to_si,
                P::Extinction { .. } | P::Other => 1.0,
            };
            let theirs = format!("the map's unit ({})", map.unit_text.trim());
            match (&map.unit, &aux.unit) {
                // cairn cannot convert between units it does not know: only the same one.
                (Some(P::Other), _) | (_, Some(P::Other)) => {
                    if bunit.eq_ignore_ascii_case(map.unit_text.trim()) {
                        Ok(1.0)
                    } else {
                        Err(theirs)
                    }
                }
                (Some(a), Some(b)) if std::mem::discriminant(a) == std::mem::discriminant(b) => {
                    Ok(si(b) / si(a))
                }
                (None, _) | (_, None) if bunit.eq_ignore_ascii_case(map.unit_text.trim()) => {
                    Ok(1.0)
                }
                _ => Err(theirs),
            }
        }
    }
}

/// Loads a map of a positive quantity (or, with `zero_allowed`, one that may be zero) beside
/// `map` (`what`: "noise map", "temperature map", ...; `values`: what its values are, for
/// messages) and checks that it lies on the same grid:
/// the same shape and, when both carry a celestial WCS, the same sky positions at the
/// corners and the centre (within a tenth of a pixel). A BUNIT it carries must be of the unit
/// `expect` calls for, and the values are converted to it; without one, they are taken in it.
pub fn load_aux_map(
    map: &Map,
    path: &Path,
    what: &str,
    values: &str,
    zero_allowed: bool,
    expect: AuxUnit,
) -> Result<ndarray::Array2<f32>> {
    load_aux_map_with_unit(map, path, what, values, zero_allowed, expect).map(|(a, _)| a)
}

/// [`load_aux_map`], with the map's BUNIT as written (trimmed; empty without one), for
/// messages about values that look like another unit's.
pub fn load_aux_map_with_unit(
    map: &Map,
    path: &Path,
    what: &str,
    values: &str,
    zero_allowed: bool,
    expect: AuxUnit,
) -> Result<(ndarray::Array2<f32>, String)> {
    let opts = LoadOptions {
        require_unit: false,
        ..LoadOptions::default()
    };
    let nm = map::load(path, &opts)?;
    let bunit = nm.unit_text.trim();
    let factor = if bunit.is_empty() {
        1.0
    } else {
        aux_factor(map, &nm, bunit, expect).map_err(|want| {
            Error::input(
                path,
                format!(
                    "has BUNIT '{bunit}', but a {what} must be in {want}; give one in that unit (or without BUNIT, when its values are in it)."
                ),
            )
        })?
    };
    if nm.data.dim() != map.data.dim() {
        return Err(Error::input(
            path,
            format!(
                "is {}x{} pixels but the map {} is {}x{}; give a {what} on the same grid.",
                nm.nx(),
                nm.ny(),
                map.path.display(),
                map.nx(),
                map.ny()
            ),
        ));
    }
    if let (Some(w), Some(wn)) = (&map.wcs, &nm.wcs) {
        let (nx, ny) = (map.nx() as f64 - 1.0, map.ny() as f64 - 1.0);
        let (sx, sy) = scale_pixel(map)
            .map(|(x, y)| w.pixel_scale(x, y))
            .unwrap_or((f64::NAN, f64::NAN));
        let tol = 0.1 * sx.min(sy);
        let mut points = vec![
            (0.0, 0.0),
            (nx, 0.0),
            (0.0, ny),
            (nx, ny),
            (nx / 2.0, ny / 2.0),
        ];
        points.extend(scale_pixel(map));
        for (x, y) in points {
            let off = match (w.pixel_to_sky(x, y), wn.pixel_to_sky(x, y)) {
                (Some(a), Some(b)) => separation_deg(a, b),
                (None, None) => 0.0,
                // On the sky in one grid and not in the other: not the same grid.
                _ => f64::INFINITY,
            };
            if off.is_nan() || off > tol {
                let how = if off.is_infinite() {
                    "lies on the sky in one grid and off it in the other".to_string()
                } else {
                    format!("lies {:.3} arcsec away", off * 3600.0)
                };
                return Err(Error::input(
                    path,
                    format!(
                        "has the shape of the map {} but not its sky grid (pixel ({x}, {y}) {how}); give a {what} regridded onto the map's pixels.",
                        map.path.display(),
                    ),
                ));
            }
        }
    }
    if nm
        .data
        .iter()
        .any(|v| v.is_finite() && (*v < 0.0 || (*v == 0.0 && !zero_allowed)))
    {
        let (which, must) = if zero_allowed {
            ("negative", "zero or more")
        } else {
            ("zero or negative", "positive")
        };
        return Err(Error::input(
            path,
            format!(
                "has {which} {values}; a {what} must be {must} where defined (mark unknown pixels as NaN)."
            ),
        ));
    }
    let bunit = bunit.to_string();
    if factor == 1.0 {
        Ok((nm.data, bunit))
    } else {
        Ok((nm.data.mapv(|v| (v as f64 * factor) as f32), bunit))
    }
}

/// Builds the summary of a loaded map.
/// The conversion factors of `ctx` for `map`.
pub fn conversion(map: &Map, ctx: &crate::score::Context) -> ConversionSummary {
    use crate::physics::constants::{M_H, M_SUN, PC};
    // A map in a unit without conversion takes none of the assumptions: only the reason.
    if let Some(units::PixelUnit::Other) = map.unit {
        return ConversionSummary {
            column_per_unit_cm2: None,
            mass_per_unit_pixel_msun: None,
            assumptions: Vec::new(),
            why_none: crate::score::conversion_blocker(map, ctx),
        };
    }
    let mut assumptions = Vec::new();
    // A value is credited to its source only when it is the default; a value the user gave
    // is marked as given.
    let defaults = crate::score::Context::default();
    let source = |is_default: bool, paper: &'static str| if is_default { paper } else { "given" };
    if let Some(u) = map.unit {
        match u {
            units::PixelUnit::Extinction { band } => {
                assumptions.push(format!(
                    "N(H2) = {:e} cm-2 per mag of A_V ({})",
                    ctx.nh2_per_av_m2 * 1e-4,
                    source(
                        ctx.nh2_per_av_m2 == defaults.nh2_per_av_m2,
                        "Bohlin et al. 1978"
                    )
                ));
                if band == units::ExtinctionBand::K {
                    assumptions.push(format!(
                        "A_V = {:.3} A_K ({})",
                        ctx.av_per_ak,
                        source(ctx.av_per_ak == defaults.av_per_ak, "Rieke & Lebofsky 1985")
                    ));
                }
            }
            u if u.is_emission() => {
                let o = &ctx.opacity;
                let k = map
                    .wavelength_m
                    .map(|w| o.kappa_cm2_per_g(units::C_LIGHT / w));
                let d = &defaults.opacity;
                let cite = match (
                    o.kappa0_cm2_per_g == d.kappa0_cm2_per_g && o.nu0_hz == d.nu0_hz,
                    o.beta == d.beta,
                ) {
                    (true, true) => "normalisation of Beckwith et al. 1990, default beta",
                    (true, false) => "normalisation of Beckwith et al. 1990, beta given",
                    (false, true) => "given, default beta",
                    (false, false) => "given",
                };
                assumptions.push(format!(
                    "kappa = {} cm2/g of gas (nu/{} GHz)^{} ({cite}), {} at this wavelength; optically thin",
                    o.kappa0_cm2_per_g,
                    o.nu0_hz / 1e9,
                    o.beta,
                    k.map(|k| format!("{k:.5} cm2/g")).unwrap_or_else(|| "unknown".into())
                ));
                if let Some(t) = &ctx.temperature_k {
                    assumptions.push(format!("dust temperature {}", t.describe("K")));
                }
            }
            _ => {}
        }
    }
    assumptions.push(format!(
        "mu_H2 = {}, mu_p = {} ({}), m_H = {} u",
        ctx.mu_h2,
        ctx.mu_p,
        source(
            ctx.mu_h2 == defaults.mu_h2 && ctx.mu_p == defaults.mu_p,
            "Kauffmann et al. 2008; metal-free H2 and He"
        ),
        crate::physics::constants::M_H_U
    ));
    if let Some(d) = ctx.distance_m {
        assumptions.push(format!("distance {} pc", units::tidy(d / PC)));
    }
    match crate::score::Converter::new(map, ctx) {
        Ok(c) => {
            // At the map centre, or, when that lies off the sky, at the scale pixel.
            let at = scale_pixel(map);
            let centre = ((map.nx() as f64 - 1.0) / 2.0, (map.ny() as f64 - 1.0) / 2.0);
            let f = match at {
                Some((x, y)) if (x, y) != centre => c.factor(y as usize, x as usize),
                _ => c.central_factor(),
            };
            let mass = match (ctx.distance_m, &map.wcs, at) {
                (Some(d), Some(w), Some((x, y))) => {
                    let omega = w.pixel_solid_angle(x, y);
                    Some(ctx.mu_h2 * M_H * f * omega * d * d / M_SUN)
                }
                _ => None,
            };
            assumptions.push(crate::score::mass_caution(map.unit).into());
            ConversionSummary {
                column_per_unit_cm2: Some(f * 1e-4),
                mass_per_unit_pixel_msun: mass,
                assumptions,
                why_none: None,
            }
        }
        Err(why) => ConversionSummary {
            column_per_unit_cm2: None,
            mass_per_unit_pixel_msun: None,
            assumptions,
            why_none: Some(why),
        },
    }
}

/// Builds the summary of a loaded map, with the physical assumptions of `segment`.
pub fn summarise_with(
    map: &Map,
    noise_choice: &NoiseChoice,
    ctx: &crate::score::Context,
) -> Result<Summary> {
    let mut s = summarise(map, noise_choice)?;
    s.conversion = conversion(map, ctx);
    if let (Some(sg), Some(f)) = (s.suggested.as_mut(), s.conversion.column_per_unit_cm2) {
        let column = sg.floor * f;
        sg.floor_column_cm2 = Some(column);
        sg.floor_av_mag = Some(column / (ctx.nh2_per_av_m2 * 1e-4));
    }
    Ok(s)
}

/// Builds the summary of a loaded map with the default physical assumptions.
pub fn summarise(map: &Map, noise_choice: &NoiseChoice) -> Result<Summary> {
    let (nx, ny) = (map.nx(), map.ny());
    let (cx, cy) = ((nx as f64 - 1.0) / 2.0, (ny as f64 - 1.0) / 2.0);
    let at = scale_pixel(map);
    let sky = map.wcs.as_ref().map(|w| {
        let equatorial = w.frame().is_equatorial();
        let text = |lon: f64, lat: f64| {
            if equatorial {
                format!(
                    "{} {}",
                    angles::format_hms(lon, 2),
                    angles::format_dms(lat, 1)
                )
            } else {
                // Named, as the degrees alone do not say which is which.
                let (a, b) = match w.frame() {
                    SkyFrame::Galactic => ("l", "b"),
                    SkyFrame::Ecliptic => ("lambda", "beta"),
                    _ => ("lon", "lat"),
                };
                format!("{a} = {lon:.6}, {b} = {lat:+.6} deg")
            }
        };
        let centre = (at == Some((cx, cy)))
            .then(|| w.pixel_to_sky(cx, cy))
            .flatten();
        let projection = match w.projection() {
            "linear" => "linear axes (no projection code)".to_string(),
            p => format!("the {p} projection's domain"),
        };
        let why_none = match (centre, at) {
            (Some(_), _) => None,
            (None, Some(_)) => Some(format!(
                "the map centre, pixel ({cx}, {cy}), lies off the sky (outside {projection})"
            )),
            (None, None) => Some(format!(
                "no pixel of the map lies on the sky (outside {projection}); check CRPIX, CDELT (or CD) and CRVAL"
            )),
        };
        SkySummary {
            frame: frame_name(w.frame()),
            projection: w.projection().to_string(),
            distortion: w.distortion().map(str::to_string),
            centre_lon_deg: centre.map(|c| c.0),
            centre_lat_deg: centre.map(|c| c.1),
            centre_text: centre.map(|(lon, lat)| text(lon, lat)),
            why_none,
            scale_pixel: at.map(|(x, y)| [x, y]),
            scale_pixel_is: at.map(|p| {
                if p == (cx, cy) {
                    "centre"
                } else if p == w.reference_pixel() {
                    "reference pixel"
                } else {
                    "nearest the reference pixel"
                }
                .to_string()
            }),
            scale_pixel_lon_lat_deg: at
                .and_then(|(x, y)| w.pixel_to_sky(x, y))
                .map(|(a, b)| [a, b]),
            pixel_scale_arcsec: at.map(|(x, y)| {
                let (sx, sy) = w.pixel_scale(x, y);
                [sx * 3600.0, sy * 3600.0]
            }),
            pixel_solid_angle_sr: at.map(|(x, y)| w.pixel_solid_angle(x, y)),
        }
    });
    let beam = map.beam.map(|b| {
        // In units of the side of a square pixel of the pixel's solid angle, so that the two
        // sizes and the pixels per beam agree on pixels of unequal sides or sheared ones.
        let px = sky
            .as_ref()
            .and_then(|s| s.pixel_solid_angle_sr)
            .map(|sr| sr.sqrt().to_degrees() * 3600.0);
        BeamSummary {
            major_arcsec: b.major_deg * 3600.0,
            minor_arcsec: b.minor_deg * 3600.0,
            pa_deg: b.pa_deg,
            major_px: px.map(|p| b.major_deg * 3600.0 / p),
            minor_px: px.map(|p| b.minor_deg * 3600.0 / p),
            area_px: beam_area_px(map),
            source: map.beam_source.unwrap_or(Source::Header),
        }
    });
    let wavelength = map.wavelength_m.map(|w| WavelengthSummary {
        wavelength_um: units::as_given(w * 1e6),
        frequency_ghz: units::C_LIGHT / w / 1e9,
        source: map.wavelength_source.unwrap_or(Source::Header),
    });
    let n_missing = map.missing_count();
    let n_pixels = nx * ny;
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for &v in map.data.iter().filter(|v| v.is_finite()) {
        lo = lo.min(v as f64);
        hi = hi.max(v as f64);
    }
    let values = ValueSummary {
        min: lo.is_finite().then_some(lo),
        max: hi.is_finite().then_some(hi),
        n_pixels,
        n_missing,
        fraction_missing: n_missing as f64 / n_pixels as f64,
    };
    let clipped = noise::clipped_stats(map.data.view());
    let difference = noise::difference_sigma(map.data.view());
    let (sigma, source) = noise_for(map, noise_choice)?;
    let why_none = match (&clipped, sigma) {
        (Err(e), None) => Some(format!("no noise estimate is possible: {e}")),
        _ => None,
    };
    let background = clipped.as_ref().map(|c| c.median).ok();
    // segment's own default, or its refusal, which is said.
    let min_area = default_min_area_px(map);
    let suggested = match (sigma, background) {
        (Some(s), Some(bg)) => Some(Suggested {
            floor: bg + 3.0 * s,
            prominence: 3.0 * s,
            min_area_px: min_area.as_ref().ok().map(|&n| n as f64),
            floor_column_cm2: None,
            floor_av_mag: None,
        }),
        _ => None,
    };
    let mut warnings = map.warnings.clone();
    if let Some(k) = &sky {
        match (&k.why_none, k.scale_pixel) {
            (Some(why), Some([x, y])) => warnings.push(format!(
                "{why}: the pixel scale{} are taken at pixel ({x}, {y}), {}, and vary across such a map",
                if map.beam.is_some() {
                    ", the beam in pixels and segment's default --min-area"
                } else {
                    " and solid angle"
                },
                scale_pixel_words(k.scale_pixel_is.as_deref().unwrap_or(""))
            )),
            (Some(why), None) => warnings.push(format!(
                "{why}: nothing can be measured on the sky"
            )),
            _ => {}
        }
    }
    if let Some(why) = beam_too_large(map) {
        warnings.push(format!("segment refuses this map as it is: {why}"));
    } else if let Err(e) = &min_area {
        warnings.push(format!(
            "segment refuses its default minimum area: {}",
            e.trim_end_matches('.')
        ));
    }
    if let (NoiseChoice::Estimate, Some(sg), Ok(d)) = (noise_choice, sigma, &difference) {
        let ratio = sg / d;
        if !(0.5..=2.0).contains(&ratio) {
            warnings.push(format!(
                "the noise estimate ({sg:.4e}) and the pixel-difference estimate ({d:.4e}) differ by a factor {ratio:.1}: either the noise is correlated over several pixels, as noise smoothed by a beam is (then the first is right and the second low), or it is independent from pixel to pixel, as cairn synth's is, and emission smaller than the background boxes remains (then the first is high and the second nearer); check, or give --noise"
            ));
        }
    }
    if let (Some(sg), Ok(d)) = (sigma, &difference) {
        warnings.extend(noise_given_warning(map, noise_choice, sg, *d));
    }
    if map.beam.is_none() {
        warnings.push(
            "no beam in the header (BMAJ/BMIN): give --beam for areas in beams and physical sizes"
                .into(),
        );
    }
    Ok(Summary {
        file: map.path.display().to_string(),
        hdu: map.hdu_index,
        hdu_name: map.hdu_name.clone(),
        shape: [nx, ny],
        stored_axes: map.stored_axes.clone(),
        plane: map.plane,
        bitpix: map.bitpix,
        data_type: data_type(map.bitpix),
        unit: map.unit_text.clone(),
        unit_kind: map.unit.map(|u| u.kind_name().to_string()),
        unit_source: map.unit_source,
        sky,
        beam,
        wavelength,
        values,
        noise: NoiseSummary {
            sigma,
            source,
            clipped: clipped.ok(),
            difference_sigma: difference.ok(),
            why_none,
        },
        suggested,
        conversion: conversion(map, &crate::score::Context::default()),
        warnings,
    })
}

/// [`SkySummary::scale_pixel_is`] in words.
fn scale_pixel_words(is: &str) -> &'static str {
    match is {
        "centre" => "the map centre",
        "reference pixel" => "the reference pixel (CRPIX)",
        _ => "the pixel on the sky nearest the reference pixel (CRPIX)",
    }
}

fn g(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    if (1e-3..1e5).contains(&a) {
        format!("{v:.5}")
            .trim_end_matches('0')
            .trim_end_matches('.')
            .to_string()
    } else {
        format!("{v:.4e}")
    }
}

/// The summary as text for people.
pub fn render_text(s: &Summary) -> String {
    let mut out = String::new();
    let mut line = |k: &str, v: String| out.push_str(&format!("{k:<16}{v}\n"));
    line("file", s.file.clone());
    line(
        "hdu",
        match &s.hdu_name {
            Some(n) => format!("{} ({n})", s.hdu),
            None => s.hdu.to_string(),
        },
    );
    let mut shape = format!("{} x {} pixels", s.shape[0], s.shape[1]);
    if s.stored_axes.len() > 2 {
        shape.push_str(&format!(" (stored as {:?}", s.stored_axes));
        if let Some(p) = s.plane {
            shape.push_str(&format!(", plane {p}"));
        }
        shape.push(')');
    }
    line("shape", shape);
    line("data type", s.data_type.clone());
    line(
        "unit",
        format!(
            "{} -> {}{}",
            if s.unit.is_empty() { "(none)" } else { &s.unit },
            s.unit_kind
                .clone()
                .unwrap_or_else(|| "not understood".into()),
            if matches!(s.unit_source, Source::Option) {
                " (from --unit)"
            } else {
                ""
            }
        ),
    );
    match &s.sky {
        Some(k) => {
            let projection = if k.projection == "linear" {
                "longitude and latitude linear in the pixels (no projection code)".to_string()
            } else {
                format!("{} projection", k.projection)
            };
            line(
                "sky frame",
                match &k.distortion {
                    Some(d) => format!("{}, {projection} with {d} distortion", k.frame),
                    None => format!("{}, {projection}", k.frame),
                },
            );
            line(
                "centre",
                match (
                    &k.centre_text,
                    k.centre_lon_deg,
                    k.centre_lat_deg,
                    &k.why_none,
                ) {
                    // Sexagesimal with its degrees beside it; other frames' text is in degrees.
                    (Some(t), Some(lon), Some(lat), _) if !t.ends_with(" deg") => {
                        format!("{t} ({lon:.6}, {lat:+.6} deg)")
                    }
                    (Some(t), _, _, _) => t.clone(),
                    (_, _, _, Some(why)) => format!("none: {why}"),
                    _ => "none".into(),
                },
            );
            line(
                "pixel scale",
                match (k.pixel_scale_arcsec, k.pixel_solid_angle_sr, k.scale_pixel) {
                    (Some(p), Some(sr), Some([x, y])) => {
                        let mut t =
                            format!("{:.4}\" x {:.4}\" ({sr:.4e} sr per pixel)", p[0], p[1]);
                        let is = k.scale_pixel_is.as_deref().unwrap_or("centre");
                        if is != "centre" {
                            t.push_str(&format!(" at pixel ({x}, {y}), {}", scale_pixel_words(is)));
                            if let Some([lon, lat]) = k.scale_pixel_lon_lat_deg {
                                t.push_str(&format!(" ({lon:.6}, {lat:+.6} deg)"));
                            }
                        }
                        t
                    }
                    _ => "none: no pixel of the map lies on the sky".into(),
                },
            );
        }
        None => line("sky frame", "none (pixel units only)".into()),
    }
    match &s.beam {
        Some(b) => {
            let mut t = format!(
                "{:.2}\" x {:.2}\" at PA {:.1} deg",
                b.major_arcsec, b.minor_arcsec, b.pa_deg
            );
            if let (Some(a), Some(bm), Some(area)) = (b.major_px, b.minor_px, b.area_px) {
                t.push_str(&format!(
                    " = {a:.2} x {bm:.2} pixels, {area:.1} pixels per beam"
                ));
                // Pixels of unequal sides (or sheared): the sizes are in square pixels of the
                // same area, which the line says.
                if let Some(k) = &s.sky
                    && let (Some(p), Some(sr)) = (k.pixel_scale_arcsec, k.pixel_solid_angle_sr)
                {
                    let side = sr.sqrt().to_degrees() * 3600.0;
                    if (p[0] / side - 1.0).abs() > 0.01 || (p[1] / side - 1.0).abs() > 0.01 {
                        t.push_str(&format!(
                            " (in pixels of the same area, {side:.4}\" square; the pixels are {:.4}\" x {:.4}\")",
                            p[0], p[1]
                        ));
                    }
                }
            }
            if matches!(b.source, Source::Option) {
                t.push_str(" (from --beam)");
            }
            line("beam", t);
        }
        None => line("beam", "unknown (give --beam)".into()),
    }
    match &s.wavelength {
        Some(w) => line(
            "wavelength",
            format!(
                "{:.1} um ({:.2} GHz){}",
                w.wavelength_um,
                w.frequency_ghz,
                if matches!(w.source, Source::Option) {
                    " (from --wavelength)"
                } else {
                    ""
                }
            ),
        ),
        None => line("wavelength", "unknown".into()),
    }
    let range = match (s.values.min, s.values.max) {
        (Some(a), Some(b)) => format!("{} to {}", g(a), g(b)),
        _ => "no finite pixels".into(),
    };
    line("values", range);
    line(
        "missing",
        format!(
            "{} of {} pixels ({:.2}%)",
            s.values.n_missing,
            s.values.n_pixels,
            100.0 * s.values.fraction_missing
        ),
    );
    match (s.noise.sigma, &s.noise.why_none) {
        (Some(sig), _) => {
            let mut t = format!("{} ({})", g(sig), s.noise.source);
            if let Some(d) = s.noise.difference_sigma {
                t.push_str(&format!("; pixel-difference estimate {}", g(d)));
            }
            line("noise", t);
        }
        (None, Some(why)) => {
            let mut t = format!("none: {why}; give --noise or --noise-map");
            if let Some(d) = s.noise.difference_sigma {
                t.push_str(&format!(" (the pixel-difference estimate is {})", g(d)));
            }
            line("noise", t)
        }
        (None, None) => line("noise", "unknown".into()),
    }
    if let Some(sg) = &s.suggested {
        line(
            "suggested",
            match sg.min_area_px {
                Some(a) => format!(
                    "--floor {} --prominence {} --min-area {a}px (a starting point)",
                    g(sg.floor),
                    g(sg.prominence),
                ),
                None => format!(
                    "--floor {} --prominence {} (a starting point; no --min-area: one beam is more than the map, see the warning below)",
                    g(sg.floor),
                    g(sg.prominence),
                ),
            },
        );
        if let (Some(n), Some(av)) = (sg.floor_column_cm2, sg.floor_av_mag) {
            line(
                "",
                format!(
                    "that floor is N(H2) = {} cm-2, A_V = {} mag, by the conversion below",
                    g(n),
                    g(av)
                ),
            );
        }
    }
    let c = &s.conversion;
    match (c.column_per_unit_cm2, &c.why_none) {
        (Some(f), _) => {
            let mut t = format!("N(H2) = {} cm-2 per map unit", g(f));
            if let Some(m) = c.mass_per_unit_pixel_msun {
                t.push_str(&format!("; {} Msun per map unit per pixel", g(m)));
            }
            out.push_str(&format!("{:<16}{t}\n", "conversion"));
            for a in &c.assumptions {
                out.push_str(&format!("{:<16}{a}\n", ""));
            }
        }
        (None, Some(why)) => out.push_str(&format!("{:<16}none: {why}\n", "conversion")),
        _ => {}
    }
    for w in &s.warnings {
        out.push_str(&format!("warning: {w}\n"));
    }
    out
}

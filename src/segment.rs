//! `cairn segment`: from a loaded map to the hierarchy, the catalogue, label maps, the tree
//! file and the run record.
//!
//! Owns the reading of thresholds written with units (`5sigma`, `2e21cm-2`, `3beam`,
//! `400arcsec2`, `12px`), the defaults (a floor 3 noise widths above the clipped median, a
//! prominence of 3 noise widths, a minimum area of one beam or 9 pixels: common practice, to
//! be tuned), and the files a run writes. Noise-unit thresholds use one noise value for the
//! whole map (with `--noise-map`, its median).

use std::path::{Path, PathBuf};
use std::time::Instant;

use serde::Serialize;
use sha2::{Digest, Sha256};

use crate::error::{Error, Result};
use crate::header::{Header, Value};
use crate::hierarchy::{self, Connectivity, Hierarchy, Params};
use crate::inspect::{self, NoiseChoice};
use crate::map::Map;
use crate::measure::{self, Kind, Measurement};
use crate::noise;
use crate::output::{self, Outputs};
use crate::table::{Param, ParamValue, Table};
use crate::units::{self, Dimension};
use crate::wcs::SkyFrame;

/// A level threshold: in map units or in noise units.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Level {
    /// In map units.
    Value(f64),
    /// A multiple of the noise. As a floor it is counted from the background (the map's
    /// clipped median), as the default floor is; as a prominence it is a rise.
    Sigma(f64),
    /// A column density or an extinction given for a map in another unit, turned into map
    /// units by the run's own conversion (the one its masses use), which must be the same at
    /// every pixel (see [`parse_level`]).
    Converted {
        /// The level in map units.
        value: f64,
        /// The H2 column density it stands for, m^-2.
        n_h2_m2: f64,
        /// As given: a column density (SI) or magnitudes of extinction.
        given: units::Quantity,
        /// The band of a level given in magnitudes.
        band: units::ExtinctionBand,
    },
}

impl Level {
    /// The level in map units, unless it is in noise units.
    pub fn map_value(&self) -> Option<f64> {
        match *self {
            Level::Value(v) | Level::Converted { value: v, .. } => Some(v),
            Level::Sigma(_) => None,
        }
    }

    /// How a converted level was read, such as "7mag of A_V = 6.58e21 cm-2 of H2" (None for
    /// the others).
    pub fn conversion_note(&self) -> Option<String> {
        match *self {
            Level::Converted {
                n_h2_m2,
                given,
                band,
                ..
            } => Some(match given.dim {
                Dimension::Magnitude => format!(
                    "{}mag of {} = {} cm-2 of H2",
                    units::tidy(given.si),
                    match band {
                        units::ExtinctionBand::V => "A_V",
                        units::ExtinctionBand::K => "A_K",
                    },
                    units::tidy(n_h2_m2 * 1e-4)
                ),
                _ => format!("{} cm-2 of H2", units::tidy(n_h2_m2 * 1e-4)),
            }),
            _ => None,
        }
    }
}

/// An area threshold.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Area {
    /// Pixels.
    Pixels(f64),
    /// Beams (needs a beam and a WCS).
    Beams(f64),
    /// Steradians (needs a WCS).
    SolidAngle(f64),
}

/// Parses `--floor`/`--prominence`: `5sigma`, a plain number in map units, a quantity of the
/// map's kind, or, on a map of another kind, a column density (`2e21cm-2`) or an extinction
/// (`7mag`, in `band`: A_V unless `--extinction-band K`).
///
/// A column density or extinction on a map of another kind is turned into map units with the
/// conversion the run's column densities and masses use ([`crate::score::Converter`]): N(H2)
/// per magnitude of A_V (`--column-per-av`) and A_V per A_K for extinction, and for dust
/// emission the temperature, opacity law and wavelength. The conversion is linear, so a
/// prominence (a rise) converts as a floor does. It must be the same at every pixel: a map
/// with a temperature map, or in Jy/pixel (whose pixels' solid angles differ), is refused
/// such levels.
pub fn parse_level(
    text: &str,
    map: &Map,
    physics: &crate::score::Context,
    band: units::ExtinctionBand,
    what: &str,
) -> Result<Level> {
    if let Ok(q) = units::parse_quantity(text, &[Dimension::Sigma], what) {
        return Ok(Level::Sigma(q.si));
    }
    let e = match units::parse_map_value(text, map.unit, what) {
        Ok(v) => return Ok(Level::Value(v)),
        Err(e) => e,
    };
    let convertible = !matches!(map.unit, Some(units::PixelUnit::Other) | None);
    if convertible
        && let Ok(q) = units::parse_quantity(
            text,
            &[Dimension::ColumnDensity, Dimension::Magnitude],
            what,
        )
    {
        return converted_level(text, q, map, physics, band, what);
    }
    Err(Error::usage(format!(
        "{what} '{text}' is {}: give a multiple of the noise such as 5sigma, or a value in the map's unit ({}) such as {}{}.",
        // A well-formed quantity of another kind says which kind it is.
        e.split_once("' is ")
            .and_then(|(_, rest)| rest.split_once(", but "))
            .map(|(kind, _)| format!("{kind}, not a level of this map"))
            .unwrap_or_else(|| "not understood".into()),
        if map.unit_text.is_empty() {
            "none"
        } else {
            &map.unit_text
        },
        example_value(map),
        match map.unit {
            Some(units::PixelUnit::Other) | None => "",
            Some(units::PixelUnit::ColumnDensity { .. }) => ", or an extinction such as 7mag",
            Some(units::PixelUnit::Extinction { .. }) => ", or a column density such as 2e21cm-2",
            Some(_) => ", or a column density such as 2e21cm-2 or an extinction such as 7mag",
        }
    )))
}

/// A column density or extinction level in the units of a map of another kind.
fn converted_level(
    text: &str,
    q: units::Quantity,
    map: &Map,
    physics: &crate::score::Context,
    band: units::ExtinctionBand,
    what: &str,
) -> Result<Level> {
    let n_h2_m2 = match q.dim {
        Dimension::Magnitude => {
            q.si * physics.nh2_per_av_m2
                * match band {
                    units::ExtinctionBand::V => 1.0,
                    units::ExtinctionBand::K => physics.av_per_ak,
                }
        }
        _ => q.si,
    };
    let unit = if map.unit_text.is_empty() {
        "no unit".to_string()
    } else {
        format!("'{}'", map.unit_text)
    };
    let refuse = |why: String| {
        Error::usage(format!(
            "{what} '{text}' is {}, which on the map {} (in {unit}) is converted to the map's unit as the masses are, but {why}; or give the level in the map's unit (such as {}) or in noise units (such as 5sigma).",
            match q.dim {
                Dimension::Magnitude => "an extinction",
                _ => "a column density",
            },
            map.path.display(),
            example_value(map)
        ))
    };
    let conv = crate::score::Converter::new(map, physics).map_err(refuse)?;
    let factor = conv.uniform_factor().ok_or_else(|| {
        refuse(
            if matches!(map.unit, Some(units::PixelUnit::FluxPerPixel { .. })) {
                "the conversion of a Jy/pixel map differs from pixel to pixel (each pixel's solid angle), so no one level in the map's unit stands for it".to_string()
            } else {
                "the conversion differs from pixel to pixel with the temperature map, so no one level in the map's unit stands for it; give --temperature instead of --temperature-map to convert it at one temperature".to_string()
            },
        )
    })?;
    if !(factor.is_finite() && factor > 0.0) {
        return Err(refuse(format!(
            "the conversion factor is not a positive number ({factor:e} m^-2 per map unit)"
        )));
    }
    Ok(Level::Converted {
        value: n_h2_m2 / factor,
        n_h2_m2,
        given: q,
        band,
    })
}

fn example_value(map: &Map) -> &'static str {
    match map.unit {
        Some(units::PixelUnit::ColumnDensity { .. }) => "2e21cm-2",
        Some(units::PixelUnit::Extinction { .. }) => "3mag",
        Some(units::PixelUnit::SurfaceBrightness { .. }) => "20MJy/sr",
        Some(units::PixelUnit::FluxPerBeam { .. }) => "0.05Jy/beam",
        Some(units::PixelUnit::FluxPerPixel { .. }) => "0.01Jy/pixel",
        Some(units::PixelUnit::Other) | None => "2.5",
    }
}

/// Parses `--min-area`: `12px` or a plain number of pixels, `1.5beam`, `400arcsec2`.
pub fn parse_area(text: &str) -> Result<Area> {
    let q = units::parse_quantity(
        text,
        &[
            Dimension::Pure,
            Dimension::Pixels,
            Dimension::Beams,
            Dimension::SolidAngle,
        ],
        "--min-area",
    )
    .map_err(Error::usage)?;
    if q.si.is_nan() || q.si < 0.0 {
        return Err(Error::usage(format!(
            "--min-area '{text}' must not be negative."
        )));
    }
    Ok(match q.dim {
        Dimension::Beams => Area::Beams(q.si),
        Dimension::SolidAngle => Area::SolidAngle(q.si),
        _ => Area::Pixels(q.si),
    })
}

/// The options of a segmentation run.
#[derive(Debug, Clone)]
pub struct SegmentOptions {
    /// Lowest level considered (default: 3 sigma above the clipped median; a
    /// [`Level::Sigma`] floor is counted from that median too).
    pub floor: Option<Level>,
    /// Least rise of a peak above where it meets a neighbour (default: 3 sigma).
    pub prominence: Option<Level>,
    /// Least area of a leaf (default: one beam, or 9 pixels without a beam).
    pub min_area: Option<Area>,
    /// Pixel adjacency.
    pub connectivity: Connectivity,
    /// Also write leaf footprints grown down to the floor.
    pub grow_leaves: bool,
    /// Catalogue leaves only.
    pub leaves_only: bool,
    /// Noise choice.
    pub noise: NoiseChoice,
    /// Output folder.
    pub output: PathBuf,
    /// Replace existing outputs.
    pub force: bool,
    /// The command line, for the run record.
    pub command_line: Vec<String>,
    /// Physical assumptions (distance, temperature, opacity, ...).
    pub physics: crate::score::Context,
    /// The other files the assumptions came from, by name (`temperature_map`,
    /// `sigma_nt_map`), recorded in the run record with their SHA-256 (the noise map of
    /// [`NoiseChoice::Map`] is recorded as `noise_map` without being listed here).
    pub other_inputs: Vec<(String, PathBuf)>,
    /// `--floor`, `--prominence` and `--min-area` as the user typed them, for the records
    /// (`None`: described from the levels themselves).
    pub threshold_texts: [Option<String>; 3],
    /// Figure style; `None` draws no figures (`--no-figure`).
    pub figure: Option<crate::render::Style>,
    /// Which leaves the map figure labels.
    pub label_choice: crate::draw::LabelChoice,
}

/// Thresholds resolved to map units and pixels.
#[derive(Debug, Clone, Serialize)]
pub struct Resolved {
    /// Floor, map units.
    pub floor: f64,
    /// Prominence, map units.
    pub prominence: f64,
    /// Minimum area, pixels (rounded up).
    pub min_area_px: usize,
    /// Noise used, map units (null if none).
    pub noise: Option<f64>,
    /// How the noise was set.
    pub noise_source: String,
    /// Background level (clipped median), map units.
    pub background: Option<f64>,
    /// How each threshold was given, in one spelling (`5sigma`, a value in map units,
    /// `11px`, `default`), for comparing runs.
    pub given: [String; 3],
    /// Each threshold as the user typed it (with what a converted level stood for), for the
    /// catalogue's header and the run record.
    pub typed: [String; 3],
    /// Thresholds that look like slips ([`threshold_warnings`]), for stderr and the run record.
    pub warnings: Vec<String>,
}

/// Whether a threshold was typed as a bare number (read in the map's unit).
fn bare_number(text: Option<&String>) -> Option<f64> {
    text.and_then(|t| t.trim().parse::<f64>().ok())
        .filter(|v| v.is_finite())
}

/// Ways to write `text` in other units than the map's, for a bare number far from the map's
/// values: noise units for numbers a noise multiple could be (where the noise is known), a
/// column density for numbers of that size on maps of another kind, magnitudes for small
/// numbers on maps not in magnitudes; the last two only where the map converts to them
/// (`score::conversion_blocker`), so that every spelling offered is one this run takes.
fn other_spellings(
    text: &str,
    v: f64,
    map: &Map,
    physics: &crate::score::Context,
    noise_known: bool,
) -> Option<String> {
    let t = text.trim();
    let mut ways = Vec::new();
    if noise_known && v.abs() <= 100.0 {
        ways.push(format!("{t}sigma"));
    }
    let converts = crate::score::conversion_blocker(map, physics).is_none();
    let column = matches!(map.unit, Some(units::PixelUnit::ColumnDensity { .. }));
    let magnitudes = matches!(map.unit, Some(units::PixelUnit::Extinction { .. }));
    if converts && !column && v.abs() >= 1e15 {
        ways.push(format!("{t}cm-2"));
    }
    if converts && !magnitudes && v.abs() > 0.0 && v.abs() < 100.0 {
        ways.push(format!("{t}mag"));
    }
    (!ways.is_empty()).then(|| ways.join(" or "))
}

/// Warnings for thresholds typed as bare numbers (which are read in the map's unit) that lie
/// so far from the map's values that another unit was probably meant: a floor more than a
/// thousand times below every pixel (every valid pixel is then considered, as with no floor)
/// and a prominence above the map's whole rise above the floor (no peak can pass it). Levels
/// given with a unit or in sigma are taken as meant.
pub fn threshold_warnings(
    map: &Map,
    o: &SegmentOptions,
    floor: f64,
    noise_known: bool,
) -> Vec<String> {
    let mut out = Vec::new();
    let floor_bare = bare_number(o.threshold_texts[0].as_ref());
    let prominence_bare = bare_number(o.threshold_texts[1].as_ref());
    if floor_bare.is_none() && prominence_bare.is_none() {
        return out;
    }
    // The lowest and highest valid values, in parallel pieces (a bare floor is the common
    // way to give one, and maps may hold billions of pixels).
    let range = |piece: &[f32]| {
        piece
            .iter()
            .filter(|v| v.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
                (lo.min(v as f64), hi.max(v as f64))
            })
    };
    let both = |a: (f64, f64), b: (f64, f64)| (a.0.min(b.0), a.1.max(b.1));
    let (lo, hi) = match map.data.as_slice() {
        Some(all) => {
            use rayon::prelude::*;
            all.par_chunks(1 << 20)
                .map(range)
                .reduce(|| (f64::INFINITY, f64::NEG_INFINITY), both)
        }
        None => map
            .data
            .rows()
            .into_iter()
            .map(|r| range(&r.to_vec()))
            .fold((f64::INFINITY, f64::NEG_INFINITY), both),
    };
    if !lo.is_finite() {
        return out;
    }
    let unit = match map_unit(map) {
        u if u.is_empty() => "the map's unit".to_string(),
        u => u,
    };
    if let (Some(v), Some(t)) = (floor_bare, o.threshold_texts[0].as_ref())
        && v > 0.0
        && lo > 1e3 * v
    {
        out.push(format!(
            "--floor {} is a bare number, read in {unit}: far below every pixel (the lowest is {lo:.4e}), so every valid pixel is considered{}",
            t.trim(),
            other_spellings(t, v, map, &o.physics, noise_known)
                .map(|w| format!("; if it was meant in another unit, give it, such as {w}"))
                .unwrap_or_default()
        ));
    }
    if let (Some(v), Some(t)) = (prominence_bare, o.threshold_texts[1].as_ref())
        && hi > floor
        && v > hi - floor
    {
        out.push(format!(
            "--prominence {} is a bare number, read in {unit}: more than the map's whole rise above the floor ({:.4e}), so no peak can pass it{}",
            t.trim(),
            hi - floor,
            other_spellings(t, v, map, &o.physics, noise_known)
                .map(|w| format!("; if it was meant in another unit, give it, such as {w}"))
                .unwrap_or_default()
        ));
    }
    out
}

/// Resolves thresholds against the map's noise, beam and pixel size.
pub fn resolve(map: &Map, o: &SegmentOptions) -> Result<Resolved> {
    resolve_with(map, o, None)
}

/// [`resolve`], with the noise map of a `--noise-map` run already loaded.
fn resolve_with(
    map: &Map,
    o: &SegmentOptions,
    noise_map: Option<ndarray::ArrayView2<f32>>,
) -> Result<Resolved> {
    if !map.data.iter().any(|v| v.is_finite()) {
        return Err(Error::input(
            &map.path,
            match map.missing_value {
                Some(m) => format!(
                    "has no pixel with a value (every pixel is missing: NaN, BLANK, infinite or the --missing-value {m} given); check --missing-value, and that this is the right HDU (--hdu) or plane (--plane)."
                ),
                None => "has no pixel with a value (every pixel is missing: NaN, BLANK or infinite); check that this is the right HDU (--hdu) or plane (--plane).".to_string(),
            },
        ));
    }
    let (sigma, source) = inspect::noise_for_with(map, &o.noise, noise_map)?;
    // The background level (clipped median) is needed only for a floor in noise units (the
    // default one included): such a floor is that many noise widths above the background.
    let background = if o.floor.and_then(|l| l.map_value()).is_none() {
        // A map whose pixels mostly share one value still has that value as its median.
        match noise::clipped_stats(map.data.view()) {
            Ok(c) => Some(c.median),
            Err(noise::NoNoise::Constant(v) | noise::NoNoise::Quantised(v)) => Some(v),
            Err(noise::NoNoise::AllMissing) => None,
        }
    } else {
        None
    };
    let need_sigma = |what: &str| -> Result<f64> {
        sigma.ok_or_else(|| {
            Error::input(
                &map.path,
                format!("has no measurable noise, so {what} cannot be given in sigma; give it in map units or set --noise."),
            )
        })
    };
    let floor = match o.floor {
        Some(Level::Value(v) | Level::Converted { value: v, .. }) => v,
        Some(Level::Sigma(k)) => background.unwrap_or(0.0) + k * need_sigma("--floor")?,
        None => {
            background.unwrap_or(0.0)
                + 3.0 * need_sigma("the default floor (3 sigma above the background)")?
        }
    };
    let prominence = match o.prominence {
        Some(Level::Value(v) | Level::Converted { value: v, .. }) => v,
        Some(Level::Sigma(k)) => k * need_sigma("--prominence")?,
        None => 3.0 * need_sigma("the default prominence (3 sigma)")?,
    };
    let given = |l: Option<Level>, v: f64| match l {
        Some(Level::Sigma(k)) => format!("{}sigma", crate::units::tidy(k)),
        Some(l @ Level::Converted { .. }) => l.conversion_note().unwrap_or_default(),
        _ => crate::units::tidy(v),
    };
    if prominence.is_nan() || prominence < 0.0 {
        return Err(Error::usage(format!(
            "--prominence must not be negative (it is {}); give 0 or more, such as 3sigma.",
            given(o.prominence, prominence)
        )));
    }
    // A level beyond the range of numbers (1e306 cm-2 on a map in m-2) is no level the map
    // can reach or the catalogues can record.
    for (i, name, v, l) in [
        (0, "--floor", floor, o.floor),
        (1, "--prominence", prominence, o.prominence),
    ] {
        if !v.is_finite() {
            let as_typed = match &o.threshold_texts[i] {
                Some(t) => t.trim().to_string(),
                None => given(l, v),
            };
            return Err(Error::usage(format!(
                "{name} {as_typed} is beyond the range of numbers in the map's unit ({v}); give a level the map's values can reach, such as 3sigma."
            )));
        }
    }
    // At the map's centre, or where that lies off the sky of its projection, at the pixel on
    // the sky that inspect names (so inspect's suggestion and segment's default agree).
    let pixel_sr = match (map.wcs.as_ref(), crate::inspect::scale_pixel(map)) {
        (Some(w), Some((x, y))) => Some(w.pixel_solid_angle(x, y)),
        _ => None,
    };
    // A beam larger than the map (most often one written in arcsec where FITS asks for
    // degrees) would make every size, error and state wrong, whatever --min-area says.
    if let Some(why) = crate::inspect::beam_too_large(map) {
        return Err(Error::usage(format!("{why}.")));
    }
    let beam_px = crate::inspect::beam_area_px(map);
    let area_px = match o.min_area {
        Some(Area::Pixels(n)) => n,
        Some(Area::Beams(k)) => {
            k * beam_px.ok_or_else(|| {
                Error::input(&map.path, "has no beam or no celestial WCS, so --min-area cannot be given in beams; give --beam, or give the area in px.")
            })?
        }
        Some(Area::SolidAngle(sr)) => {
            sr / pixel_sr.ok_or_else(|| {
                Error::input(&map.path, "has no celestial WCS, so --min-area cannot be given as a sky area; give it in px.")
            })?
        }
        // One beam, as inspect suggests it, refused in inspect's words when larger than the map.
        None => crate::inspect::default_min_area_px(map).map_err(Error::usage)? as f64,
    };
    let min_area_px = (area_px - 1e-9).ceil().max(1.0) as usize;
    if min_area_px > map.nx() * map.ny() {
        // In the words of the value itself: a count beyond 2^64 would read as its cap.
        let area = if area_px < 1e15 {
            format!("{min_area_px}")
        } else {
            format!("{area_px:.3e}")
        };
        return Err(Error::usage(format!(
            "--min-area of {area} pixels is larger than the whole map {} ({} pixels); give a smaller one.",
            map.path.display(),
            map.nx() * map.ny()
        )));
    }
    let show = |l: Option<Level>, typed: &Option<String>| match (l, typed) {
        (Some(l @ Level::Converted { given, .. }), Some(t)) => {
            let note = l.conversion_note().unwrap_or_default();
            if given.dim == Dimension::Magnitude {
                note
            } else {
                format!("{} = {note}", t.trim())
            }
        }
        (Some(_), Some(t)) => t.trim().to_string(),
        (Some(Level::Value(v)), None) => crate::table::fmt_f64(v),
        (Some(l @ Level::Converted { .. }), None) => l.conversion_note().unwrap_or_default(),
        (Some(Level::Sigma(k)), None) => format!("{k}sigma"),
        (None, _) => "default".to_string(),
    };
    let area_text = match o.min_area {
        Some(Area::Pixels(n)) => format!("{n}px"),
        Some(Area::Beams(k)) => format!("{k}beam"),
        Some(Area::SolidAngle(sr)) => format!("{}arcsec2", sr / (units::ARCSEC * units::ARCSEC)),
        None => "default".to_string(),
    };
    // The thresholds in one spelling each, so that runs given the same thresholds in other
    // words (`5 sigma`, `11` pixels, `5e21cm-2` or `5e21` on a map in cm-2) compare as the
    // same (compare, pooled completeness); a value in map units with the map's unit.
    let unit = map_unit(map);
    let canonical = |l: Option<Level>| match l {
        Some(Level::Value(v)) => value_with_unit(v, &unit),
        Some(l @ Level::Converted { .. }) => l.conversion_note().unwrap_or_default(),
        Some(Level::Sigma(k)) => format!("{k}sigma"),
        None => "default".to_string(),
    };
    let mut warnings = threshold_warnings(map, o, floor, sigma.is_some());
    // A noise given far from the map's own, questioned as inspect questions it (a factor of a
    // hundred: the pixel-difference estimate from about 20,000 differences is plenty, and
    // costs some tenths of a millisecond where the whole map's would cost milliseconds).
    if let (Some(sg), NoiseChoice::Value(_) | NoiseChoice::Map(_)) = (sigma, &o.noise)
        && let Ok(d) = noise::difference_sigma_sampled(map.data.view(), 20_000)
    {
        warnings.extend(inspect::noise_given_warning(map, &o.noise, sg, d));
    }
    // An area given on the sky or in beams that comes to less than a pixel: every peak then
    // passes the area test, which a unit slip (arcsec2 for arcmin2) would make silently.
    if matches!(o.min_area, Some(Area::Beams(_) | Area::SolidAngle(_))) && area_px < 1.0 {
        let typed = o.threshold_texts[2]
            .as_deref()
            .map(str::trim)
            .map(str::to_string)
            .unwrap_or_else(|| area_text.clone());
        warnings.push(format!(
            "--min-area {typed} is {} of a pixel, so one pixel is the least area and every peak passes the area test{}",
            if area_px >= 0.001 {
                format!("{area_px:.3}")
            } else {
                format!("{area_px:.2e}")
            },
            beam_px
                .map(|b| format!(" (a beam covers {:.1} pixels)", b))
                .unwrap_or_default()
        ));
    }
    Ok(Resolved {
        warnings,
        floor,
        prominence,
        min_area_px,
        noise: sigma,
        noise_source: source,
        background,
        given: [
            canonical(o.floor),
            canonical(o.prominence),
            area_text.clone(),
        ],
        typed: [
            show(o.floor, &o.threshold_texts[0]),
            show(o.prominence, &o.threshold_texts[1]),
            match (o.min_area, &o.threshold_texts[2]) {
                (Some(_), Some(t)) => t.trim().to_string(),
                // The default is one beam; without one, 9 pixels (a 3 x 3 patch).
                (None, _) if beam_px.is_none() => "default (9 px: the map has no beam)".into(),
                _ => area_text,
            },
        ],
    })
}

/// Thresholds taken from an earlier run's record (`segment --thresholds-from RUN`): its floor
/// and prominence in map units, its least area in pixels and its connectivity, as it used
/// them, so that a map with injected cores (or a re-run) is segmented exactly as the science
/// run was, whatever the noise estimate of the new map.
#[derive(Debug, Clone, PartialEq)]
pub struct RunThresholds {
    /// The run record read.
    pub record: PathBuf,
    /// Floor, map units.
    pub floor: f64,
    /// Prominence, map units.
    pub prominence: f64,
    /// Least area, pixels.
    pub min_area_px: f64,
    /// Pixel adjacency.
    pub connectivity: Connectivity,
    /// Said on stderr and recorded: a resolution that differs from this run's.
    pub warnings: Vec<String>,
}

/// Reads the thresholds of the run in `run` (its folder or its `run.json`) for `map`, of which
/// `taken` (floor, prominence, least area) are used (the others given beside it): refused when
/// the record cannot be read, lacks them, holds values no run has (a negative prominence, a
/// least area that is not a whole number of pixels), or gives levels taken in another unit
/// than the map's (`map_unit`); warned about when thresholds are taken from a run made at
/// another resolution (`--common-resolution`) than `map` has, or its least area from a run of
/// a map of another size.
pub fn thresholds_from_run(run: &Path, map: &Map, taken: [bool; 3]) -> Result<RunThresholds> {
    let record = if run.is_dir() {
        run.join(names::RUN)
    } else {
        run.to_path_buf()
    };
    if let Some(e) = crate::error::not_text(
        &record,
        "a run record (a JSON text file)",
        "give --thresholds-from a run folder of segment or its run.json",
    ) {
        return Err(e);
    }
    let text = std::fs::read_to_string(&record).map_err(|e| {
        Error::input(
            &record,
            format!("cannot be read ({e}); give --thresholds-from a run folder of segment or its run.json."),
        )
    })?;
    let v: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        Error::input(
            &record,
            format!("is not a run record ({e}); give --thresholds-from a run folder of segment or its run.json."),
        )
    })?;
    let missing = |what: &str| {
        Error::input(
            &record,
            format!(
                "has no {what}, so it is not a run record of segment; give --thresholds-from a run folder of segment."
            ),
        )
    };
    let number = |key: &str| -> Result<f64> {
        v.pointer(&format!("/parameters/{key}/value"))
            .and_then(|x| x.as_f64())
            .filter(|x| x.is_finite())
            .ok_or_else(|| missing(&format!("parameters.{key}.value")))
    };
    let (floor, prominence, min_area_px) =
        (number("floor")?, number("prominence")?, number("min_area")?);
    if prominence < 0.0 || min_area_px < 1.0 || min_area_px.fract() != 0.0 {
        return Err(Error::input(
            &record,
            format!(
                "holds a prominence of {prominence} and a least area of {min_area_px} pixels, which no run of segment records (a prominence of 0 or more, a whole number of pixels), so it was changed; give --thresholds-from the record as segment wrote it."
            ),
        ));
    }
    let connectivity = match v
        .pointer("/parameters/connectivity")
        .and_then(|x| x.as_u64())
    {
        Some(4) => Connectivity::Four,
        Some(8) => Connectivity::Eight,
        _ => return Err(missing("parameters.connectivity of 4 or 8")),
    };
    let theirs = v
        .pointer("/parameters/floor/unit")
        .and_then(|x| x.as_str())
        .ok_or_else(|| missing("parameters.floor.unit"))?;
    let ours = map_unit(map);
    if (taken[0] || taken[1]) && theirs != ours {
        return Err(Error::input(
            &record,
            format!(
                "gives its thresholds in {} but {} is in {}; take thresholds from a run of a map in the same unit, or give both --floor and --prominence beside it.",
                if theirs.is_empty() { "no unit" } else { theirs },
                map.path.display(),
                if ours.is_empty() {
                    "no unit".to_string()
                } else {
                    ours
                },
            ),
        ));
    }
    let mut warnings = Vec::new();
    let res = |x: Option<f64>| {
        x.map(|r| format!("{}", units::as_given(r / crate::physics::constants::PC)))
    };
    let (theirs_res, ours_res) = (
        res(v
            .pointer("/common_resolution/resolution_m")
            .and_then(|x| x.as_f64())),
        res(map.common_resolution.map(|c| c.resolution_m)),
    );
    if taken.iter().any(|&t| t) && theirs_res != ours_res {
        let say = |r: &Option<String>| {
            r.as_ref().map_or("its own resolution".to_string(), |r| {
                format!("a common resolution of {r} pc")
            })
        };
        warnings.push(format!(
            "the thresholds come from a run at {} ({}), and this map is at {}; its levels and least area may not mean the same here",
            say(&theirs_res),
            record.display(),
            say(&ours_res)
        ));
    }
    let size = (
        v.pointer("/map/nx").and_then(|x| x.as_u64()),
        v.pointer("/map/ny").and_then(|x| x.as_u64()),
    );
    if taken[2] && size != (Some(map.nx() as u64), Some(map.ny() as u64)) {
        warnings.push(format!(
            "the thresholds come from a run of a map of another size ({}), so its least area of {} pixels may not be the same area on the sky here",
            record.display(),
            crate::table::fmt_f64(min_area_px)
        ));
    }
    Ok(RunThresholds {
        record,
        floor,
        prominence,
        min_area_px,
        connectivity,
        warnings,
    })
}

/// The unit of the map's values in the outputs: the canonical spelling of the unit cairn
/// read ([`units::canonical_unit`]: `cm-2` for a BUNIT of `1/cm2`, `mag` for `mag(AK)`,
/// `Jy/beam` for `JY/BEAM`), or a unit it does not convert as written.
pub fn map_unit(map: &Map) -> String {
    units::canonical_unit(map.unit, &map.unit_text)
}

/// A value in map units as text for the records: its shortest round-trip digits (plain
/// between 1e-4 and 1e15, else with an exponent: `5e21`, not `5000000000000000000000`),
/// followed by the unit when there is one (`5e21 cm-2`).
fn value_with_unit(v: f64, unit: &str) -> String {
    let number = if v == 0.0 || !v.is_finite() || (1e-4..1e15).contains(&v.abs()) {
        format!("{v}")
    } else {
        format!("{v:e}")
    };
    if unit.is_empty() {
        number
    } else {
        format!("{number} {unit}")
    }
}

/// The input's place in the run record: `path` as text and, when the path is not valid UTF-8
/// (which JSON text cannot hold), also `path_bytes`, its bytes as numbers, from which
/// [`recorded_input`] gives back the exact path.
pub fn input_path_record(path: &Path) -> (serde_json::Value, Option<serde_json::Value>) {
    let text = serde_json::Value::from(path.display().to_string());
    #[cfg(unix)]
    if path.to_str().is_none() {
        use std::os::unix::ffi::OsStrExt;
        return (
            text,
            Some(serde_json::Value::from(
                path.as_os_str().as_bytes().to_vec(),
            )),
        );
    }
    (text, None)
}

/// The input map's path in a run record's `input` object (see [`input_path_record`]).
pub fn recorded_input(input: &serde_json::Value) -> PathBuf {
    #[cfg(unix)]
    if let Some(bytes) = input["path_bytes"].as_array() {
        use std::os::unix::ffi::OsStringExt;
        let b: Option<Vec<u8>> = bytes
            .iter()
            .map(|v| v.as_u64().and_then(|n| u8::try_from(n).ok()))
            .collect();
        if let Some(b) = b {
            return PathBuf::from(std::ffi::OsString::from_vec(b));
        }
    }
    PathBuf::from(input["path"].as_str().unwrap_or(""))
}

/// Names of the output files of a run.
pub mod names {
    /// The catalogue as CSV.
    pub const CSV: &str = "structures.csv";
    /// The catalogue as a FITS binary table.
    pub const FITS_TABLE: &str = "structures.fits";
    /// The catalogue as VOTable.
    pub const VOTABLE: &str = "structures.vot";
    /// Smallest structure per pixel.
    pub const LABELS: &str = "labels.fits";
    /// Leaf footprints grown down to the floor.
    pub const GROWN: &str = "leaves-grown.fits";
    /// The leaves measured over their grown footprints, as CSV.
    pub const GROWN_CSV: &str = "structures-grown.csv";
    /// The leaves measured over their grown footprints, as a FITS binary table.
    pub const GROWN_FITS_TABLE: &str = "structures-grown.fits";
    /// The leaves measured over their grown footprints, as VOTable.
    pub const GROWN_VOTABLE: &str = "structures-grown.vot";
    /// The tree as JSON.
    pub const TREE_JSON: &str = "hierarchy.json";
    /// The tree as Graphviz DOT.
    pub const TREE_DOT: &str = "hierarchy.dot";
    /// The run record.
    pub const RUN: &str = "run.json";
    /// The map with its leaves (PNG).
    pub const OVERLAY_PNG: &str = "overlay.png";
    /// The map with its leaves (SVG).
    pub const OVERLAY_SVG: &str = "overlay.svg";
    /// The tree diagram (PNG).
    pub const TREE_PNG: &str = "tree.png";
    /// The tree diagram (SVG).
    pub const TREE_SVG: &str = "tree.svg";
    /// The map with its leaves (PDF).
    pub const OVERLAY_PDF: &str = "overlay.pdf";
    /// The tree diagram (PDF).
    pub const TREE_PDF: &str = "tree.pdf";
    /// The figures, in the order they are listed: map then tree, each as PNG, SVG and PDF.
    pub const FIGURES: [&str; 6] = [
        OVERLAY_PNG,
        OVERLAY_SVG,
        OVERLAY_PDF,
        TREE_PNG,
        TREE_SVG,
        TREE_PDF,
    ];
    /// The tree diagram's files.
    pub const TREE_FIGURES: [&str; 3] = [TREE_PNG, TREE_SVG, TREE_PDF];
    /// Every file a run may write.
    pub const ALL: [&str; 17] = [
        CSV,
        FITS_TABLE,
        VOTABLE,
        LABELS,
        GROWN,
        GROWN_CSV,
        GROWN_FITS_TABLE,
        GROWN_VOTABLE,
        TREE_JSON,
        TREE_DOT,
        RUN,
        OVERLAY_PNG,
        OVERLAY_SVG,
        OVERLAY_PDF,
        TREE_PNG,
        TREE_SVG,
        TREE_PDF,
    ];
}

/// What a finished run reports.
#[derive(Debug, Clone, Serialize)]
pub struct RunSummary {
    /// Leaves found (structures without children, top-level ones included).
    pub leaves: usize,
    /// Branches (structures with children and a parent).
    pub branches: usize,
    /// Roots with children (the catalogue's kind `root`); a top-level structure without
    /// children is counted as a leaf, so leaves, branches and roots add up to the structures.
    pub roots: usize,
    /// Trees: the top-level structures, with children or not (the roots plus the lone leaves).
    pub trees: usize,
    /// Thresholds used.
    pub thresholds: Resolved,
    /// Seconds taken.
    pub seconds: f64,
    /// Files written.
    pub files: Vec<PathBuf>,
    /// Why no physical quantities were computed, if none were.
    pub physics_note: Option<String>,
    /// Count of leaves by state, when masses were computed.
    pub leaf_states: Option<std::collections::BTreeMap<String, usize>>,
    /// A warning when some structures' masses are negative (the map below zero there).
    pub negative_masses: Option<String>,
    /// With masses asked for (a distance given) and not made: the warning saying why.
    pub physics_warning: Option<String>,
    /// With a figure: leaves inside its frame and how many of them got no label.
    pub figure_labels: Option<(usize, usize)>,
    /// With a figure: the leaves chosen for a label (`label_choice`) and all the leaves.
    pub figure_labels_chosen: Option<(usize, usize)>,
    /// With a figure: the tree's leaves chosen for an id (`label_choice`) and how many of
    /// those ids it left out (too crowded).
    pub figure_tree_ids: Option<(usize, usize)>,
    /// With a figure of a very long and narrow map: the scale along y over that along x
    /// (the map is then drawn at unequal scales to keep the figure a usable size).
    pub figure_y_stretch: Option<f64>,
    /// The overlay's width in pixels when it is narrower than the requested width (a tall
    /// map, whose panel fills no more).
    pub figure_narrowed_to: Option<u32>,
    /// The leaf labels' size in points when it is smaller than the usual size (a crowded map).
    pub figure_label_pt: Option<f64>,
    /// With a figure: the beam's drawn size in figure pixels (the smaller side of its box).
    pub figure_beam_px: Option<f64>,
    /// With a figure: its scale bar was left out, the map's frame too narrow for it.
    pub figure_scale_bar_left_out: bool,
}

fn sky_names(map: &Map) -> (&'static str, &'static str) {
    match map.wcs.as_ref().map(|w| w.frame()) {
        Some(SkyFrame::Galactic) => ("glon", "glat"),
        Some(SkyFrame::Icrs) | Some(SkyFrame::Fk5 { .. }) | Some(SkyFrame::Fk4 { .. }) => {
            ("ra", "dec")
        }
        Some(_) => ("lon", "lat"),
        None => ("lon", "lat"),
    }
}

/// The VOTable system and equinox of a frame (VOTable 1.4 COOSYS), if it has one.
fn coosys_of(frame: &SkyFrame) -> Option<(&'static str, Option<String>)> {
    match frame {
        SkyFrame::Icrs => Some(("ICRS", None)),
        SkyFrame::Fk5 { equinox } => Some(("eq_FK5", Some(format!("J{equinox}")))),
        SkyFrame::Fk4 { equinox } => Some(("eq_FK4", Some(format!("B{equinox}")))),
        SkyFrame::Galactic => Some(("galactic", None)),
        _ => None,
    }
}

/// The UCDs of a frame's longitude and latitude.
fn position_ucds(frame: &SkyFrame) -> (&'static str, &'static str) {
    if matches!(frame, SkyFrame::Galactic) {
        ("pos.galactic.lon", "pos.galactic.lat")
    } else {
        ("pos.eq.ra", "pos.eq.dec")
    }
}

/// UCDs (IVOA UCD1+) and coordinate systems for the VOTable: the id, the peak and centroid
/// positions in the map's frame (the centroid as the main position), and the centroid in the
/// second frame (`second`, from [`other_frame`]).
fn annotate_sky(t: &mut Table, map: &Map, lon: &str, lat: &str, second: Option<&FrameColumns>) {
    t.ucds
        .push(("id".into(), "meta.id;meta.main".into(), String::new()));
    let Some(frame) = map.wcs.as_ref().map(|w| w.frame()) else {
        return;
    };
    let Some((system, equinox)) = coosys_of(frame) else {
        return;
    };
    let (a, b) = position_ucds(frame);
    t.coosys.push(("map_frame".into(), system.into(), equinox));
    let r = "map_frame".to_string();
    t.ucds.extend([
        (format!("{lon}_peak"), a.to_string(), r.clone()),
        (format!("{lat}_peak"), b.to_string(), r.clone()),
        (lon.to_string(), format!("{a};meta.main"), r.clone()),
        (lat.to_string(), format!("{b};meta.main"), r),
    ]);
    if let Some((to, [(c, _), (d, _)])) = second
        && let Some((system, equinox)) = coosys_of(to)
    {
        let (a, b) = position_ucds(to);
        t.coosys
            .push(("second_frame".into(), system.into(), equinox));
        t.ucds.extend([
            (c.to_string(), a.to_string(), "second_frame".into()),
            (d.to_string(), b.to_string(), "second_frame".into()),
        ]);
    }
}

type FrameColumns = (SkyFrame, [(&'static str, &'static str); 2]);

/// The second frame the catalogue gives centroids in: ICRS for galactic maps, galactic for
/// ICRS, FK5 and FK4 maps (none for others), with its column names and descriptions.
fn other_frame(map: &Map) -> Option<FrameColumns> {
    match map.wcs.as_ref()?.frame() {
        SkyFrame::Galactic => Some((
            SkyFrame::Icrs,
            [
                ("ra", "right ascension (ICRS)"),
                ("dec", "declination (ICRS)"),
            ],
        )),
        SkyFrame::Icrs | SkyFrame::Fk5 { .. } | SkyFrame::Fk4 { .. } => Some((
            SkyFrame::Galactic,
            [
                ("glon", "galactic longitude"),
                ("glat", "galactic latitude"),
            ],
        )),
        _ => None,
    }
}

/// Which pixels a catalogue measures each structure over.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Footprint {
    /// Its own pixels: a leaf down to its merge level, a branch with its descendants and the
    /// pixels that joined below them (`structures.*`).
    Own,
    /// A leaf's footprint grown down to the floor (`leaves-grown.fits`), whose reference
    /// level is the floor (`structures-grown.*`).
    Grown,
}

/// The words of the grown catalogue's note that tell it from the main catalogue (read by
/// `compare`).
pub const GROWN_MARK: &str = "measured over its footprint grown down to the floor";

/// Builds the catalogue table from the measurements, made over `footprint`.
pub fn catalogue(
    map: &Map,
    rows: &[&Measurement],
    phys: Option<&[&crate::score::Physical]>,
    with_distance: bool,
    r: &Resolved,
    run_meta: &[Param],
    footprint: Footprint,
) -> Table {
    let grown = footprint == Footprint::Grown;
    // The unit cairn read, in its canonical spelling (the map's BUNIT as written is the
    // parameter `bunit`).
    let u = map_unit(map);
    // A sum over pixels: map unit times pixel, with the pixel where unit parsers read it.
    let usum = crate::units::times_pixel(&u);
    let (lon, lat) = sky_names(map);
    let mut t = Table {
        name: if grown { "GROWN_LEAVES" } else { "STRUCTURES" }.into(),
        meta: run_meta.to_vec(),
        ..Default::default()
    };
    if grown {
        t.notes.push(format!("footprints: one row per leaf, {GROWN_MARK} ({}: the pixels above the floor reached from the leaf's own by a priority flood along descending values), not down to its merge level as in {}; id, kind, parent and depth are the leaf's in the hierarchy", names::GROWN, names::CSV));
        t.notes.push("the reference level of a grown footprint is the floor: merge_level holds the floor, and excess_sum, mass_excess and the columns that use it (density, Jeans, Bonnor-Ebert, virial, free-fall, state) are taken above the floor".into());
    }
    t.notes.push("kind: leaf = no children (core candidate), branch = children and a parent, root = children and no parent; a top-level structure without children is a leaf with parent -1".into());
    t.notes.push("pixel coordinates are zero-based, (0,0) the centre of the first pixel; centroids and sizes are weighted by the map value".into());
    if let Some(c) = &map.common_resolution {
        t.notes.push(format!(
            "the map was smoothed to a common resolution of {} pc at {} pc{}: pixel positions, areas and sizes in pixels refer to the grid of labels.fits, not to the input file's (the sky columns are the same on either)",
            units::tidy(c.resolution_m / crate::physics::constants::PC),
            units::tidy(c.distance_m / crate::physics::constants::PC),
            if c.block > 1 {
                format!(" and regridded by blocks of {0} x {0} of its pixels", c.block)
            } else {
                String::new()
            }
        ));
    }
    let unit = match map_unit(map) {
        u if u.is_empty() => String::new(),
        u => format!(" {u}"),
    };
    t.notes.push(format!(
        "thresholds: floor {}{unit}, prominence {}{unit}, min area {} px",
        crate::table::fmt_f64(r.floor),
        crate::table::fmt_f64(r.prominence),
        r.min_area_px
    ));
    let f = |g: &dyn Fn(&Measurement) -> f64| rows.iter().map(|m| g(m)).collect::<Vec<f64>>();
    let i = |g: &dyn Fn(&Measurement) -> i64| rows.iter().map(|m| g(m)).collect::<Vec<i64>>();
    t.push_i64(
        "id",
        "",
        "structure id (ids number structures by decreasing peak; 0 holds the highest pixel)",
        i(&|m| m.id as i64),
    );
    t.push_text(
        "kind",
        "leaf, branch or root",
        rows.iter().map(|m| m.kind.word().to_string()).collect(),
    );
    t.push_i64(
        "parent",
        "",
        "id of the smallest enclosing structure, -1 for none",
        i(&|m| m.parent),
    );
    t.push_i64(
        "n_children",
        "",
        "number of children",
        i(&|m| m.n_children as i64),
    );
    t.push_i64("depth", "", "number of ancestors", i(&|m| m.depth as i64));
    t.push_i64(
        "peak_x",
        "pixel",
        "column of the peak",
        i(&|m| m.peak_x as i64),
    );
    t.push_i64(
        "peak_y",
        "pixel",
        "row of the peak",
        i(&|m| m.peak_y as i64),
    );
    t.push_f64("peak", &u, "peak value", f(&|m| m.peak));
    if map.wcs.is_some() {
        t.push_f64(
            &format!("{lon}_peak"),
            "deg",
            "longitude of the peak",
            f(&|m| m.peak_lon),
        );
        t.push_f64(
            &format!("{lat}_peak"),
            "deg",
            "latitude of the peak",
            f(&|m| m.peak_lat),
        );
    }
    t.push_f64("x", "pixel", "value-weighted centroid column", f(&|m| m.x));
    t.push_f64("y", "pixel", "value-weighted centroid row", f(&|m| m.y));
    if map.wcs.is_some() {
        t.push_f64(lon, "deg", "longitude of the centroid", f(&|m| m.lon));
        t.push_f64(lat, "deg", "latitude of the centroid", f(&|m| m.lat));
    }
    let second = other_frame(map);
    annotate_sky(&mut t, map, lon, lat, second.as_ref());
    if let (Some((to, names)), Some(w)) = (second, map.wcs.as_ref()) {
        let conv: Vec<(f64, f64)> = rows
            .iter()
            .map(|m| {
                crate::wcs::convert_frame(m.lon, m.lat, w.frame(), &to)
                    .unwrap_or((f64::NAN, f64::NAN))
            })
            .collect();
        for (k, (name, what)) in names.into_iter().enumerate() {
            t.push_f64(
                name,
                "deg",
                &format!("{what} of the centroid, converted from the map's frame"),
                conv.iter()
                    .map(|c| if k == 0 { c.0 } else { c.1 })
                    .collect(),
            );
        }
    }
    t.push_i64(
        "area_px",
        "pixel2",
        if grown {
            "number of pixels of the grown footprint"
        } else {
            "number of pixels, descendants included"
        },
        i(&|m| m.area_px as i64),
    );
    t.push_f64(
        "radius_px",
        "pixel",
        "effective radius sqrt(area/pi)",
        f(&|m| m.radius_px),
    );
    t.push_f64(
        "sigma_major_px",
        "pixel",
        "major-axis standard deviation of the weighted pixel positions",
        f(&|m| m.sigma_major_px),
    );
    t.push_f64(
        "sigma_minor_px",
        "pixel",
        "minor-axis standard deviation",
        f(&|m| m.sigma_minor_px),
    );
    t.push_f64(
        "angle_px",
        "deg",
        "major-axis angle from +x toward +y",
        f(&|m| m.angle_px_deg),
    );
    if map.wcs.is_some() {
        t.push_f64("area_sky", "arcsec2", "solid angle", f(&|m| m.area_arcsec2));
        t.push_f64(
            "radius",
            "arcsec",
            "effective radius sqrt(area/pi)",
            f(&|m| m.radius_arcsec),
        );
        t.push_f64(
            "fwhm_major",
            "arcsec",
            "major-axis FWHM (2.3548 sigma) on the sky",
            f(&|m| m.fwhm_major_arcsec),
        );
        t.push_f64(
            "fwhm_minor",
            "arcsec",
            "minor-axis FWHM on the sky",
            f(&|m| m.fwhm_minor_arcsec),
        );
        t.push_f64(
            "pa",
            "deg",
            "position angle of the major axis, east of north in the map's frame, 0 to 180",
            f(&|m| m.pa_deg),
        );
        t.push_f64(
            "fwhm_major_deconv",
            "arcsec",
            "major-axis FWHM of the weighted second-moment ellipse as a Gaussian with the beam's Gaussian removed (covariance minus the beam's); empty without a beam or where that difference is not positive definite (not resolved along some direction)",
            f(&|m| m.fwhm_major_deconv_arcsec),
        );
        t.push_f64(
            "fwhm_minor_deconv",
            "arcsec",
            "minor-axis FWHM with the beam removed (empty as fwhm_major_deconv)",
            f(&|m| m.fwhm_minor_deconv_arcsec),
        );
        t.push_f64(
            "pa_deconv",
            "deg",
            "position angle of the deconvolved major axis, east of north in the map's frame, 0 to 180 (empty as fwhm_major_deconv)",
            f(&|m| m.pa_deconv_deg),
        );
    }
    t.push_f64(
        "aspect",
        "",
        "sigma_major_px / sigma_minor_px (in pixels; fwhm_major / fwhm_minor on the sky)",
        f(&|m| m.aspect),
    );
    t.push_f64(
        "sum",
        &usum,
        "sum of the map over the structure",
        f(&|m| m.sum),
    );
    t.push_f64("mean", &u, "mean value", f(&|m| m.mean));
    t.push_f64(
        "merge_level",
        &u,
        if grown {
            "the floor, the reference level of a grown footprint"
        } else {
            "level where it joins its parent (the floor for top-level structures: roots and leaves without a parent)"
        },
        f(&|m| m.merge_level),
    );
    t.push_f64(
        "excess_sum",
        &usum,
        if grown {
            "sum of (value - merge_level) over the grown footprint: the leaf above the floor"
        } else {
            "sum of (value - merge_level): the structure above its surroundings"
        },
        f(&|m| m.sum_above_merge),
    );
    // Emission maps: the same sums as integrated flux densities.
    if map.unit.is_some_and(|u| u.is_emission()) {
        let to_jy = |m: &Measurement| flux_per_unit_pixel(map, m.pixel_sr).unwrap_or(f64::NAN);
        let (fs, fe) = if grown {
            (
                "flux density over the grown footprint",
                "flux density above the floor over the grown footprint",
            )
        } else {
            (
                "integrated flux density of the structure (sum times the pixel's solid angle, divided by the beam's for a map per beam; the sum itself for a map per pixel)",
                "integrated flux density above the merge level (excess_sum converted as flux)",
            )
        };
        t.push_f64("flux", "Jy", fs, f(&|m| m.sum * to_jy(m)));
        t.push_f64(
            "flux_excess",
            "Jy",
            fe,
            f(&|m| m.sum_above_merge * to_jy(m)),
        );
    }
    t.push_bool(
        "at_edge",
        "touches the map border",
        rows.iter().map(|m| m.touches_edge).collect(),
    );
    t.push_bool(
        "at_missing",
        "touches a missing pixel",
        rows.iter().map(|m| m.touches_missing).collect(),
    );
    if let Some(ph) = phys {
        physics_columns(&mut t, ph, with_distance, grown, map.unit);
    }
    t
}

/// Jy per (map unit x pixel) of an emission map: a pixel of `pixel_sr` steradians (at the
/// structure; NaN without a WCS) holds value x pixel_sr of a surface brightness, value x
/// pixel_sr / beam solid angle of a flux density per beam (the Gaussian beam's
/// pi/(4 ln 2) BMAJ BMIN), and value of a flux density per pixel. `None` for other maps or
/// where the pixel's or the beam's solid angle is unknown.
fn flux_per_unit_pixel(map: &Map, pixel_sr: f64) -> Option<f64> {
    let jy = crate::units::JANSKY;
    let sr = (pixel_sr.is_finite() && pixel_sr > 0.0).then_some(pixel_sr);
    match map.unit? {
        units::PixelUnit::SurfaceBrightness { to_si } => Some(to_si / jy * sr?),
        units::PixelUnit::FluxPerBeam { to_si } => {
            Some(to_si / jy * sr? / map.beam?.solid_angle_sr())
        }
        units::PixelUnit::FluxPerPixel { to_si } => Some(to_si / jy),
        units::PixelUnit::ColumnDensity { .. }
        | units::PixelUnit::Extinction { .. }
        | units::PixelUnit::Other => None,
    }
}

fn physics_columns(
    t: &mut Table,
    ph: &[&crate::score::Physical],
    with_distance: bool,
    grown: bool,
    unit: Option<units::PixelUnit>,
) {
    use crate::score::Physical;
    let p = |g: &dyn Fn(&Physical) -> f64| ph.iter().map(|x| g(x)).collect::<Vec<f64>>();
    t.push_f64(
        "n_peak",
        "cm-2",
        "peak H2 column density",
        p(&|x| x.n_peak_cm2),
    );
    t.push_f64(
        "n_peak_err",
        "cm-2",
        "noise uncertainty of n_peak",
        p(&|x| x.n_peak_err_cm2),
    );
    t.push_f64(
        "n_mean",
        "cm-2",
        "mean H2 column density over the footprint",
        p(&|x| x.n_mean_cm2),
    );
    t.push_f64(
        "temperature",
        "K",
        if unit.is_some_and(|u| u.is_emission()) {
            "mass-weighted dust temperature used (also for the sound speed)"
        } else {
            "mass-weighted gas temperature used for the sound speed"
        },
        p(&|x| x.temperature_k),
    );
    if !with_distance {
        return;
    }
    t.push_f64(
        "mass",
        "solMass",
        "gas mass within the footprint",
        p(&|x| x.mass),
    );
    t.push_f64(
        "mass_excess",
        "solMass",
        if grown {
            "gas mass above the floor (used for density and state)"
        } else {
            "gas mass above the merge level (used for density and state)"
        },
        p(&|x| x.mass_excess),
    );
    t.push_f64(
        "mass_err",
        "solMass",
        "noise uncertainty of the masses: noise x sqrt(area_px x min(beam area, area_px)) converted to mass, one independent value per beam (systematics not included)",
        p(&|x| x.mass_err),
    );
    t.push_f64(
        "radius_pc",
        "pc",
        "effective radius d sqrt(area/pi)",
        p(&|x| x.radius_pc),
    );
    t.push_f64(
        "radius_deconv_pc",
        "pc",
        "effective radius with half the beam removed in quadrature (empty if unresolved)",
        p(&|x| x.radius_deconv_pc),
    );
    t.push_bool(
        "unresolved",
        "deconvolved radius less than half the beam",
        ph.iter().map(|x| x.unresolved).collect(),
    );
    t.push_f64(
        "radius_moment_pc",
        "pc",
        "moment radius 1.91 d (sigma_major sigma_minor)^(1/2) of the deconvolved axes, sigma = FWHM / 2.3548 (Solomon et al. 1987; Rosolowsky & Leroy 2006); empty where fwhm_major_deconv is; not used by the physics columns",
        p(&|x| x.radius_moment_pc),
    );
    t.push_f64(
        "density",
        "cm-3",
        "mean n(H2) of a uniform sphere of the effective radius",
        p(&|x| x.density_cm3),
    );
    t.push_f64(
        "jeans_mass",
        "solMass",
        "Jeans mass (pi^(5/2) / 6) c_s^3 / (G^(3/2) rho^(1/2)) at the mean density and temperature: a sphere of diameter jeans_length",
        p(&|x| x.jeans_mass),
    );
    t.push_f64(
        "jeans_length",
        "pc",
        "Jeans length at the mean density and temperature",
        p(&|x| x.jeans_length_pc),
    );
    t.push_f64(
        "be_mass",
        "solMass",
        "critical Bonnor-Ebert mass 2.4345 R c_s^2 / G (the critical isothermal sphere), R = radius_pc, c_s at the temperature",
        p(&|x| x.be_mass),
    );
    t.push_f64("alpha_be", "", "be_mass / mass_excess", p(&|x| x.alpha_be));
    t.push_f64(
        "sigma_v",
        "km/s",
        "total velocity dispersion (thermal and non-thermal)",
        p(&|x| x.sigma_kms),
    );
    t.push_f64(
        "alpha_vir",
        "",
        "virial parameter 5 sigma_v^2 R / (G mass_excess), R = radius_pc",
        p(&|x| x.alpha_vir),
    );
    t.push_f64(
        "t_ff",
        "yr",
        "free-fall time at the mean density",
        p(&|x| x.t_ff_yr),
    );
    t.push_text(
        "state",
        "bound, marginal, unbound or unknown (see the notes)",
        ph.iter().map(|x| x.state.to_string()).collect(),
    );
    t.notes.push("state: with a velocity dispersion, bound if alpha_vir <= 2, marginal if <= 4, else unbound; without one, bound if alpha_be <= 1, marginal if <= 2, else unbound; indicative only".into());
    t.notes.push(format!(
        "{}; mass_err is the map noise only",
        crate::score::mass_caution(unit)
    ));
}

/// The hierarchy file's content (serialised as JSON with its keys in alphabetical order).
#[derive(serde::Serialize)]
pub struct TreeFile<'a> {
    connectivity: u8,
    floor: f64,
    min_area_px: usize,
    prominence: f64,
    roots: Vec<u32>,
    structures: Vec<TreeNode<'a>>,
    unit: String,
}

/// One structure of the hierarchy file.
#[derive(serde::Serialize)]
struct TreeNode<'a> {
    area_px: u64,
    children: &'a [u32],
    depth: u32,
    id: u32,
    kind: &'static str,
    /// NaN (written as null) for roots.
    merge_level: f64,
    parent: Option<u32>,
    peak: f64,
    peak_x: usize,
    peak_y: usize,
}

/// The hierarchy as JSON: structures with parent, children and levels.
pub fn tree_json<'a>(h: &'a Hierarchy, ms: &[Measurement], map: &Map) -> TreeFile<'a> {
    TreeFile {
        connectivity: match h.params.connectivity {
            Connectivity::Four => 4,
            Connectivity::Eight => 8,
        },
        floor: h.params.floor,
        min_area_px: h.params.min_area,
        prominence: h.params.prominence,
        roots: h.roots(),
        structures: h
            .structures
            .iter()
            .zip(ms)
            .map(|(s, m)| TreeNode {
                area_px: s.npix,
                children: &s.children,
                depth: s.depth,
                id: s.id,
                kind: m.kind.word(),
                merge_level: m.merge_level,
                parent: s.parent,
                peak: s.peak_value,
                peak_x: s.peak_x,
                peak_y: s.peak_y,
            })
            .collect(),
        unit: map_unit(map),
    }
}

/// The hierarchy as Graphviz DOT (petgraph's writer), nodes labelled by id.
pub fn tree_dot(h: &Hierarchy) -> String {
    use petgraph::dot::{Config, Dot};
    let g = h.graph.map(|_, id| *id, |_, _| "");
    format!("{}", Dot::with_config(&g, &[Config::EdgeNoLabel]))
}

/// SHA-256 of a file, hex.
pub fn sha256_file(path: &Path) -> Result<String> {
    use std::io::Read;
    let mut f = std::fs::File::open(path)
        .map_err(|e| Error::input(path, format!("cannot be read ({e}).")))?;
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 18];
    loop {
        let n = f
            .read(&mut buf)
            .map_err(|e| Error::input(path, format!("cannot be read ({e}).")))?;
        if n == 0 {
            break;
        }
        hasher.update(&buf[..n]);
    }
    Ok(hasher
        .finalize()
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect())
}

/// A header for a label map: the input's WCS, BUNIT empty, a description.
fn label_header(map: &Map, what: &str) -> Header {
    let mut h = Header::new();
    if let Some(w) = &map.wcs {
        for c in w.header_cards() {
            if let Some(v) = c.value {
                h.set(&c.key, v, &c.comment);
            }
        }
    }
    h.set(
        "CONTENT",
        Value::Str(what.into()),
        "what the pixel values are",
    );
    h.set("BLANKID", Value::Int(-1), "value of pixels in no structure");
    h.set(
        "ORIGIN",
        Value::Str(format!("cairn {}", env!("CARGO_PKG_VERSION"))),
        "",
    );
    h
}

/// A result made on a thread of its own, started at most once; awaited when taken and when
/// dropped, so that nothing the thread makes (a temporary file) outlives its owner.
struct Joined<T>(std::sync::Mutex<Option<std::thread::JoinHandle<T>>>);

impl<T> Default for Joined<T> {
    fn default() -> Self {
        Joined(std::sync::Mutex::new(None))
    }
}

impl<T: Send + 'static> Joined<T> {
    /// Starts `make` on a new thread unless one was started already (or the system refuses
    /// a thread: then there is nothing to take).
    fn start(&self, make: impl FnOnce() -> T + Send + 'static) {
        let mut h = self.0.lock().unwrap_or_else(|e| e.into_inner());
        if h.is_none() {
            *h = std::thread::Builder::new().spawn(make).ok();
        }
    }

    /// The result, once the thread has made it (`None` if it was never started or stopped
    /// without one).
    fn take(&self) -> Option<T> {
        let h = self.0.lock().unwrap_or_else(|e| e.into_inner()).take();
        h.and_then(|h| h.join().ok())
    }
}

impl<T> Drop for Joined<T> {
    fn drop(&mut self) {
        let h = self.0.get_mut().unwrap_or_else(|e| e.into_inner()).take();
        if let Some(h) = h {
            let _ = h.join();
        }
    }
}

/// What the measuring side of [`run`] hands on once its files are written.
struct Analysed {
    ms: std::sync::Arc<Vec<Measurement>>,
    measure_seconds: f64,
    phys: Option<Vec<crate::score::Physical>>,
    physics_note: Option<String>,
    physics_seconds: f64,
    /// Started when the measurements and physics were done.
    t_write: Instant,
    input_sha: String,
}

/// Memory a `segment` run takes beyond its loaded map, in bytes, for a map of `npix` pixels:
/// (address space, resident memory). Measured, with a margin, and an estimate: a run close to
/// a limit may be refused that would just have fitted. The peak resident memory of the
/// bench's runs was 13-14.5 bytes per pixel above the map (BENCHMARKS.md; the issue's bound
/// is 16), taken here as 16. Under an address-space limit (`ulimit -v`) the allocator
/// reserves less ahead, and a 4096^2 run with its figures (with or without grown leaves)
/// finished under a limit of 445 MB and not under 435 MB, when its address space was 281 MB
/// as the run began: about 9.7 bytes per pixel more, taken here as 11.
pub fn memory_needed(npix: u64) -> (u64, u64) {
    let fixed = 32_000_000;
    (
        npix.saturating_mul(11).saturating_add(fixed),
        npix.saturating_mul(16).saturating_add(fixed),
    )
}

/// Refuses a run whose memory (see [`memory_needed`]) exceeds the room this process has
/// ([`crate::memory`]), before any output is begun: a failed allocation later would abort
/// the process with no sentence and leave temporary files.
fn check_memory(map: &Map) -> Result<()> {
    let npix = map.data.len() as u64;
    let (virt, res) = memory_needed(npix);
    let rooms = [
        crate::memory::address_space_room().map(|r| (r, virt)),
        crate::memory::resident_room().map(|r| (r, res)),
    ];
    for (room, need) in rooms.into_iter().flatten() {
        if need > room.bytes {
            let (ny, nx) = map.data.dim();
            return Err(Error::input(
                &map.path,
                format!(
                    "segmenting its {nx} x {ny} pixels needs about {} of memory beyond the map, and {} leaves room for {}: run it where more memory is free (or with the limit raised), or segment the map in parts.",
                    crate::memory::describe_bytes(need),
                    room.limit.describe(),
                    crate::memory::describe_bytes(room.bytes)
                ),
            ));
        }
    }
    Ok(())
}

/// Runs the whole segmentation and writes the outputs. `progress` receives fractions 0..1.
pub fn run(map: &Map, o: &SegmentOptions, progress: &dyn Fn(&str, f64)) -> Result<RunSummary> {
    let t0 = Instant::now();
    check_memory(map)?;
    // The input's SHA-256 is computed beside the real work: started when a core falls idle
    // during the engine's sequential sweep (once the keys are sorted), so that it takes no
    // core from the sweep.
    let hashing: Joined<Result<String>> = Joined::default();
    let start_hashing = || {
        let path = map.path.clone();
        hashing.start(move || sha256_file(&path));
    };
    // A noise map gives the sigma thresholds its median and each structure its own noise in
    // the error columns; it is read once for both.
    let noise_map = match &o.noise {
        NoiseChoice::Map(p) => Some(inspect::load_noise_map(map, p)?),
        _ => None,
    };
    let r = resolve_with(map, o, noise_map.as_ref().map(|m| m.view()))?;
    let t_resolve = t0.elapsed().as_secs_f64();
    let mut names_list: Vec<String> = [
        names::CSV,
        names::FITS_TABLE,
        names::VOTABLE,
        names::LABELS,
        names::TREE_JSON,
        names::TREE_DOT,
        names::RUN,
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    if o.grow_leaves {
        for n in [
            names::GROWN,
            names::GROWN_CSV,
            names::GROWN_FITS_TABLE,
            names::GROWN_VOTABLE,
        ] {
            names_list.push(n.into());
        }
    }
    if o.figure.is_some() {
        names_list.extend(names::FIGURES.map(String::from));
    }
    // Every name a run may write or (with --force) remove must spare the inputs.
    let every: Vec<String> = names::ALL.iter().map(|s| s.to_string()).collect();
    let mut inputs: Vec<&std::path::Path> = vec![&map.path];
    if let NoiseChoice::Map(p) = &o.noise {
        inputs.push(p);
    }
    crate::output::refuse_inputs_as_outputs(&o.output, &every, &inputs)?;
    // Files of an earlier run that this one does not write are its to remove only when the
    // folder holds an earlier run (its record): a user's own file of such a name is left.
    let earlier: &[String] = if o.output.join(names::RUN).is_file() {
        &every
    } else {
        &[]
    };
    let mut outputs = Outputs::plan_replacing(&o.output, &names_list, earlier, o.force)?;
    let params = Params {
        floor: r.floor,
        prominence: r.prominence,
        min_area: r.min_area_px,
        connectivity: o.connectivity,
    };
    // The label map's file is begun on the idle core too, on large maps (those written
    // through a mapping, `fits_write::MAPPED_BYTES`, on Linux) when there is a second thread:
    // its pages made ready there, writing it once the hierarchy is built only converts the
    // labels. Awaited on every way out of the run, so that no temporary file outlives it.
    let labels_path = outputs.temp(names::LABELS);
    let labels_header = label_header(map, "smallest structure id per pixel");
    let begun_labels: Joined<std::result::Result<crate::fits_write::ImageFile, String>> =
        Joined::default();
    let ahead = cfg!(target_os = "linux")
        && rayon::current_num_threads() > 1
        && map.data.len() * 4 >= crate::fits_write::MAPPED_BYTES;
    let on_core_free = || {
        start_hashing();
        if ahead {
            let (path, header) = (labels_path.clone(), labels_header.clone());
            let (ny, nx) = map.data.dim();
            begun_labels.start(move || {
                crate::fits_write::begin_image_i32(&path, ny, nx, &header, true).map_err(|e| e.0)
            });
        }
    };
    let t_tree = Instant::now();
    let h = match hierarchy::build_with_hooks(
        map.data.view(),
        &params,
        &|f| progress("hierarchy", f),
        &on_core_free,
    ) {
        Ok(h) => h,
        Err(hierarchy::HierarchyError::FloorAboveMaximum { floor, max }) => {
            let file = map.path.display();
            let noise = r.noise.map(|n| format!("{n:.4e}")).unwrap_or_default();
            return Err(Error::usage(match o.floor {
                Some(l @ Level::Converted { .. }) => format!(
                    "--floor {} ({floor:.4e} in map units) lies above the highest value of {file} ({max:.4e}); lower it (cairn inspect suggests one).",
                    l.conversion_note().unwrap_or_default()
                ),
                Some(Level::Value(_)) => match o.threshold_texts[0]
                    .as_ref()
                    .filter(|t| bare_number(Some(t)).is_some_and(|v| max > 0.0 && v > 1e3 * max))
                    .and_then(|t| {
                        let ways = other_spellings(t, floor, map, &o.physics, r.noise.is_some())?;
                        Some((t, ways))
                    }) {
                    // A bare number far above the map: another unit was probably meant.
                    Some((t, ways)) => format!(
                        "--floor {} (a bare number, read in {}) lies far above the highest value of {file} ({max:.4e}); give it with its unit, such as {ways}, or lower it (cairn inspect suggests one).",
                        t.trim(),
                        match map_unit(map) {
                            u if u.is_empty() => "the map's unit".to_string(),
                            u => format!("the map's unit {u}"),
                        },
                    ),
                    None => format!(
                        "--floor {floor:.4e} lies above the highest value of {file} ({max:.4e}); lower it (cairn inspect suggests one)."
                    ),
                },
                Some(Level::Sigma(k)) => format!(
                    "--floor {k}sigma ({floor:.4e}: {k} times the noise {noise} above the background {}) lies above the highest value of {file} ({max:.4e}); lower it or give the noise with --noise (cairn inspect suggests a floor).",
                    r.background
                        .map(|b| format!("{b:.4e}"))
                        .unwrap_or_else(|| "0".into())
                ),
                None => format!(
                    "the default floor, 3 sigma above the background ({floor:.4e} with the noise {noise}), lies above the highest value of {file} ({max:.4e}), so nothing in the map rises above its noise by that estimate; give --floor in map units{}.",
                    if matches!(o.noise, NoiseChoice::Estimate) {
                        ", or the noise with --noise"
                    } else {
                        ", or check the noise you gave"
                    }
                ),
            }));
        }
        Err(e) => return Err(Error::input(&map.path, format!("{e}."))),
    };
    let tree_seconds = t_tree.elapsed().as_secs_f64();
    let h = &h;
    progress("measure", 0.0);
    // The label maps, written by the FITS thread below.
    let grown_path = o.grow_leaves.then(|| outputs.temp(names::GROWN));
    // With --grow-leaves, also the grown leaves as structures of their own, for their catalogue.
    let write_label_maps = || -> Result<(f64, Option<hierarchy::GrownLeaves>)> {
        let t = Instant::now();
        let labels_failed = |e: String| Error::output(&o.output.join(names::LABELS), e);
        match begun_labels.take() {
            Some(begun) => begun
                .map_err(labels_failed)?
                .finish_i32(h.labels.view())
                .map_err(|e| labels_failed(e.0))?,
            None => crate::fits_write::write_image_i32(
                &labels_path,
                h.labels.view(),
                &labels_header,
                true,
            )
            .map_err(|e| labels_failed(e.0))?,
        }
        if let Some(path) = &grown_path {
            let g = hierarchy::grow_leaves(map.data.view(), h, r.floor);
            crate::fits_write::write_image_i32(
                path,
                g.view(),
                &label_header(map, "leaf id per pixel, grown to the floor"),
                true,
            )
            .map_err(|e| Error::output(&o.output.join(names::GROWN), e.0))?;
            let seconds = t.elapsed().as_secs_f64();
            return Ok((
                seconds,
                Some(hierarchy::grown_leaves_hierarchy(map.data.view(), h, g)),
            ));
        }
        Ok((t.elapsed().as_secs_f64(), None))
    };
    // The measurements go to the other thread as soon as they are made (for the hierarchy's
    // files), before the physics.
    let (ms_tx, ms_rx) = std::sync::mpsc::channel::<std::sync::Arc<Vec<Measurement>>>();
    let noise_view = noise_map.as_ref().map(|m| m.view());
    let analyse = move || {
        let t_measure = Instant::now();
        let ms = std::sync::Arc::new(measure::measure_all(h, map.wcs.as_ref(), map.beam.as_ref()));
        let measure_seconds = t_measure.elapsed().as_secs_f64();
        // A send fails only if the other thread already stopped on an error, which its join
        // reports.
        let _ = ms_tx.send(ms.clone());
        drop(ms_tx);
        let t_physics = Instant::now();
        let (phys, physics_note) =
            match crate::score::score(map, h, &ms, &o.physics, r.noise, noise_view) {
                Ok(p) => (Some(p), None),
                Err(why) => (None, Some(why)),
            };
        let physics_seconds = t_physics.elapsed().as_secs_f64();
        (ms, measure_seconds, phys, physics_note, physics_seconds)
    };
    // One thread writes every FITS file, so CFITSIO is used by it alone: the label maps as soon
    // as the hierarchy is built, the hierarchy's JSON and DOT files once the measurements are
    // made, then the catalogue's FITS table once the catalogue is made.
    // This thread meanwhile measures, scores, makes the catalogue and writes the text files,
    // so on large maps the text files no longer wait for the label maps.
    let with_distance = o.physics.distance_m.is_some() && map.wcs.is_some();
    let fits_table_path = outputs.temp(names::FITS_TABLE);
    let (tree_json_path, tree_dot_path) = (
        outputs.temp(names::TREE_JSON),
        outputs.temp(names::TREE_DOT),
    );
    let (table_tx, table_rx) = std::sync::mpsc::channel::<std::sync::Arc<crate::table::Table>>();
    // With --grow-leaves: the grown leaves from the FITS thread, and their catalogue back to it.
    let grown_fits_table_path = o.grow_leaves.then(|| outputs.temp(names::GROWN_FITS_TABLE));
    let (grown_tx, grown_rx) = std::sync::mpsc::channel::<hierarchy::GrownLeaves>();
    let (grown_table_tx, grown_table_rx) =
        std::sync::mpsc::channel::<std::sync::Arc<crate::table::Table>>();
    let written = std::thread::scope(|scope| -> Result<_> {
        let fits_writer = scope.spawn(move || -> Result<f64> {
            let (seconds, grown) = write_label_maps()?;
            if let Some(g) = grown {
                // A send fails only if the other side already stopped on an error.
                let _ = grown_tx.send(g);
            }
            drop(grown_tx);
            // No measurements or table arrive if the other side failed first.
            if let Ok(ms) = ms_rx.recv() {
                let tj = serde_json::to_string_pretty(&tree_json(h, &ms, map))
                    .map_err(|e| Error::internal(e.to_string()))?
                    + "\n";
                output::write_bytes(&tree_json_path, tj.as_bytes())?;
                output::write_bytes(&tree_dot_path, tree_dot(h).as_bytes())?;
            }
            if let Ok(table) = table_rx.recv() {
                table.write_fits(&fits_table_path)?;
            }
            if let (Some(path), Ok(table)) = (&grown_fits_table_path, grown_table_rx.recv()) {
                table.write_fits(path)?;
            }
            Ok(seconds)
        });
        let made = (|| -> Result<_> {
            let (ms, measure_seconds, phys, physics_note, physics_seconds) = analyse();
            let t_write = Instant::now();
            progress("measure", 1.0);

            start_hashing();
            let input_sha = hashing
                .take()
                .ok_or_else(|| Error::internal("hashing the input failed"))??;
            let meta = run_meta(map, o, &r, &input_sha);
            let keep: Vec<usize> = (0..ms.len())
                .filter(|&i| !o.leaves_only || ms[i].kind == Kind::Leaf)
                .collect();
            let rows: Vec<&Measurement> = keep.iter().map(|&i| &ms[i]).collect();
            let phys_rows: Option<Vec<&crate::score::Physical>> =
                phys.as_ref().map(|p| keep.iter().map(|&i| &p[i]).collect());
            let mut table = catalogue(
                map,
                &rows,
                phys_rows.as_deref(),
                with_distance,
                &r,
                &meta,
                Footprint::Own,
            );
            table.notes.extend(o.physics.warnings.iter().cloned());
            if let Some(w) = physics_warning(&o.physics, map, physics_note.as_deref()) {
                table.notes.push(w);
            }
            // Counted over the rows of this table (the leaves alone with --leaves-only).
            if let Some(w) = negative_mass_warning(phys_rows.iter().flatten().copied()) {
                table.notes.push(w);
            }
            let table = std::sync::Arc::new(table);
            // The FITS writer takes its share; a send fails only if that thread already stopped on
            // an error, which its join below reports.
            let _ = table_tx.send(table.clone());
            drop(table_tx);
            table
                .write_csv_and_votable(&outputs.temp(names::CSV), &outputs.temp(names::VOTABLE))?;
            if o.grow_leaves {
                // The FITS thread hands the grown leaves on once their label plane is written;
                // it stops without them only on an error, which its join reports.
                let g = grown_rx
                    .recv()
                    .map_err(|_| Error::internal("the grown leaves were not made"))?;
                let grown = grown_catalogue(map, h, &g, o, &r, noise_view, &meta);
                let _ = grown_table_tx.send(grown.clone());
                grown.write_csv_and_votable(
                    &outputs.temp(names::GROWN_CSV),
                    &outputs.temp(names::GROWN_VOTABLE),
                )?;
            }
            drop(grown_table_tx);
            Ok(Analysed {
                ms,
                measure_seconds,
                phys,
                physics_note,
                physics_seconds,
                t_write,
                input_sha,
            })
        })();
        // Every file is complete before any is renamed: the FITS writer is joined first.
        let label_maps_seconds = fits_writer
            .join()
            .map_err(|_| Error::internal("the FITS writer stopped unexpectedly"))??;
        Ok((made?, label_maps_seconds))
    });
    let (
        Analysed {
            ms,
            measure_seconds,
            phys,
            physics_note,
            physics_seconds,
            t_write,
            input_sha,
        },
        label_maps_seconds,
    ) = written?;
    let mut labels = None;
    let mut labels_chosen = None;
    let mut tree_ids = None;
    let mut y_stretch = None;
    let mut narrowed_to = None;
    let mut label_pt = None;
    let mut beam_px = None;
    let mut scale_bar_left_out = false;
    if let Some(style) = &o.figure {
        let input = crate::draw::FigureInput {
            map,
            labels: h.labels.view(),
            structures: h
                .structures
                .iter()
                .zip(ms.iter())
                .enumerate()
                .map(|(i, (st, m))| crate::draw::FigStructure {
                    id: st.id,
                    parent: st.parent,
                    is_leaf: st.is_leaf(),
                    peak: (st.peak_x, st.peak_y),
                    peak_value: st.peak_value,
                    merge_level: m.merge_level,
                    state: phys
                        .as_ref()
                        .filter(|_| with_distance)
                        .map(|p| p[i].state.to_string()),
                    // As draw reads it from the catalogue's alpha_vir column.
                    by_virial: phys
                        .as_ref()
                        .filter(|_| with_distance)
                        .is_some_and(|p| p[i].alpha_vir.is_finite()),
                    // As draw reads it from the catalogue's mass column.
                    mass_msun: phys
                        .as_ref()
                        .filter(|_| with_distance)
                        .map(|p| p[i].mass)
                        .filter(|m| m.is_finite()),
                })
                .collect(),
            distance_pc: o
                .physics
                .distance_m
                .map(|d| d / crate::physics::constants::PC),
            title: None,
            label_choice: o.label_choice.clone(),
        };
        progress("figures", 0.0);
        let figs = crate::draw::figures(&input, style)?;
        output::write_bytes(&outputs.temp(names::OVERLAY_PNG), &figs.overlay.png)?;
        output::write_bytes(
            &outputs.temp(names::OVERLAY_SVG),
            figs.overlay.svg.as_bytes(),
        )?;
        output::write_bytes(&outputs.temp(names::OVERLAY_PDF), &figs.overlay.pdf)?;
        labels = Some((figs.overlay.leaves_in_frame, figs.overlay.labels_left_out));
        labels_chosen = Some(figs.labels_chosen);
        tree_ids = Some((figs.tree_leaves, figs.tree_ids_left_out));
        y_stretch = figs.overlay.y_stretch;
        narrowed_to = figs.overlay.narrowed_to;
        label_pt = figs.overlay.smaller_label_pt;
        beam_px = figs.overlay.beam_px;
        scale_bar_left_out = figs.overlay.scale_bar_left_out;
        if figs.tree_png.is_empty() {
            // No structure: there is no tree to draw.
            for n in names::TREE_FIGURES {
                outputs.skip(n);
            }
        } else {
            output::write_bytes(&outputs.temp(names::TREE_PNG), &figs.tree_png)?;
            output::write_bytes(&outputs.temp(names::TREE_SVG), figs.tree_svg.as_bytes())?;
            output::write_bytes(&outputs.temp(names::TREE_PDF), &figs.tree_pdf)?;
        }
        progress("figures", 1.0);
    }

    let leaves = ms.iter().filter(|m| m.kind == Kind::Leaf).count();
    let branches = ms.iter().filter(|m| m.kind == Kind::Branch).count();
    let roots = ms.iter().filter(|m| m.kind == Kind::Root).count();
    let trees = h.roots().len();
    let seconds = t0.elapsed().as_secs_f64();
    let mut input_record =
        serde_json::json!({ "sha256": input_sha, "hdu": map.hdu_index, "plane": map.plane });
    if let Some(v) = map.missing_value {
        input_record["missing_value"] = serde_json::json!(v);
    }
    let (path_text, path_bytes) =
        input_path_record(&std::fs::canonicalize(&map.path).unwrap_or_else(|_| map.path.clone()));
    input_record["path"] = path_text;
    if let Some(b) = path_bytes {
        input_record["path_bytes"] = b;
    }
    let mut other_inputs = serde_json::Map::new();
    let noise_map = match &o.noise {
        NoiseChoice::Map(p) => Some(("noise_map".to_string(), p.clone())),
        _ => None,
    };
    for (name, p) in o.other_inputs.iter().cloned().chain(noise_map) {
        let (path_text, _) =
            input_path_record(&std::fs::canonicalize(&p).unwrap_or_else(|_| p.clone()));
        let mut entry = serde_json::json!({ "path": path_text, "sha256": sha256_file(&p)? });
        // The values as used, which a re-saved copy of the same map keeps.
        let field = match name.as_str() {
            "temperature_map" => o.physics.temperature_k.as_ref(),
            "sigma_nt_map" => o.physics.sigma_nt.as_ref(),
            _ => None,
        };
        if let Some(v) = field.and_then(|f| f.values_sha256()) {
            entry["values_sha256"] = v.into();
        }
        other_inputs.insert(name, entry);
    }
    let unit = map_unit(map);
    let record = serde_json::json!({
        "cairn_version": env!("CARGO_PKG_VERSION"),
        "command_line": o.command_line,
        "input": input_record,
        "other_inputs": other_inputs,
        "map": { "nx": map.nx(), "ny": map.ny(), "unit": unit, "unit_kind": map.unit.map(|u| u.kind_name()), "header_unit": map.header.get_str("BUNIT") },
        "parameters": {
            "floor": { "value": r.floor, "unit": unit, "given": r.given[0], "typed": r.typed[0] },
            "prominence": { "value": r.prominence, "unit": unit, "given": r.given[1], "typed": r.typed[1] },
            "min_area": { "value": r.min_area_px, "unit": "pixel2", "given": r.given[2], "typed": r.typed[2] },
            "connectivity": match o.connectivity { Connectivity::Four => 4, Connectivity::Eight => 8 },
            "grow_leaves": o.grow_leaves,
            "leaves_only": o.leaves_only,
        },
        "noise": { "value": r.noise, "unit": unit, "source": r.noise_source, "background": r.background },
        "beam": map.beam,
        "common_resolution": map.common_resolution.map(|c| serde_json::json!({
            "resolution_m": c.resolution_m,
            "distance_m": c.distance_m,
            "resolution_pc": units::as_given(c.resolution_m / crate::physics::constants::PC),
            "distance_pc": units::as_given(c.distance_m / crate::physics::constants::PC),
            "input_beam": c.input_beam,
        })),
        "result": { "leaves": leaves, "branches": branches, "roots": roots, "structures": ms.len(), "trees": trees },
        "timings_seconds": {
            "thresholds_and_noise": t_resolve,
            "hierarchy": tree_seconds,
            "measurements": measure_seconds,
            "physics": physics_seconds,
            "label_maps_while_measuring": label_maps_seconds,
            "other_outputs_except_this_record": t_write.elapsed().as_secs_f64(),
            "total": seconds,
        },
        "threads": rayon::current_num_threads(),
        "warnings": map.warnings.iter().chain(&r.warnings).chain(&o.physics.warnings).cloned().chain(physics_warning(&o.physics, map, physics_note.as_deref())).chain(negative_mass_warning(phys.iter().flatten())).collect::<Vec<String>>(),
        "physics": physics_record(&o.physics, map, r.noise, physics_note.as_deref()),
    });
    let rec =
        serde_json::to_string_pretty(&record).map_err(|e| Error::internal(e.to_string()))? + "\n";
    output::write_bytes(&outputs.temp(names::RUN), rec.as_bytes())?;
    let files = outputs.commit()?;
    let leaf_states = phys.as_ref().filter(|_| with_distance).map(|p| {
        let mut c = std::collections::BTreeMap::new();
        for (m, x) in ms.iter().zip(p) {
            if m.kind == Kind::Leaf {
                *c.entry(x.state.to_string()).or_insert(0usize) += 1;
            }
        }
        c
    });
    Ok(RunSummary {
        leaves,
        branches,
        roots,
        trees,
        thresholds: r,
        seconds: t0.elapsed().as_secs_f64(),
        files,
        negative_masses: negative_mass_warning(phys.iter().flatten()),
        physics_warning: physics_warning(&o.physics, map, physics_note.as_deref()),
        physics_note,
        leaf_states,
        figure_labels: labels,
        figure_labels_chosen: labels_chosen,
        figure_tree_ids: tree_ids,
        figure_y_stretch: y_stretch,
        figure_narrowed_to: narrowed_to,
        figure_label_pt: label_pt,
        figure_beam_px: beam_px,
        figure_scale_bar_left_out: scale_bar_left_out,
    })
}

/// The catalogue of the leaves of `h` over their grown footprints `g`: the same measurements
/// ([`measure::measure_grown`]) and physics ([`crate::score::score`]) as the main catalogue,
/// with its thresholds `r` and run parameters `meta`, one row per leaf in id order; without
/// physics where the main catalogue has none.
fn grown_catalogue(
    map: &Map,
    h: &Hierarchy,
    g: &hierarchy::GrownLeaves,
    o: &SegmentOptions,
    r: &Resolved,
    noise_map: Option<ndarray::ArrayView2<f32>>,
    meta: &[Param],
) -> std::sync::Arc<Table> {
    let with_distance = o.physics.distance_m.is_some() && map.wcs.is_some();
    let ms = measure::measure_grown(g, h, map.wcs.as_ref(), map.beam.as_ref());
    let phys = crate::score::score(map, &g.hierarchy, &ms, &o.physics, r.noise, noise_map);
    let rows: Vec<&Measurement> = ms.iter().collect();
    let phys_rows: Option<Vec<&crate::score::Physical>> =
        phys.as_ref().ok().map(|p| p.iter().collect());
    let mut table = catalogue(
        map,
        &rows,
        phys_rows.as_deref(),
        with_distance,
        r,
        meta,
        Footprint::Grown,
    );
    table.notes.extend(o.physics.warnings.iter().cloned());
    if let Some(w) = physics_warning(&o.physics, map, phys.as_ref().err().map(String::as_str)) {
        table.notes.push(w);
    }
    if let Some(w) = negative_mass_warning(phys.iter().flatten()) {
        table.notes.push(w);
    }
    std::sync::Arc::new(table)
}

/// When some structures' masses are negative (the map's values below zero there: a negative
/// zero level, or the negative bowls of a map that lost its extended emission), a warning
/// saying how many and what to make of them.
fn negative_mass_warning<'a>(
    phys: impl IntoIterator<Item = &'a crate::score::Physical>,
) -> Option<String> {
    let n = phys.into_iter().filter(|p| p.mass < 0.0).count();
    (n > 0).then(|| {
        format!(
            "{n} structure{} a negative mass (the map's values are below zero there: a zero level below no emission?); their mass and n_peak mean nothing, while mass_excess, above their merge level, does: give a map whose zero is no emission for whole masses",
            if n == 1 { " has" } else { "s have" }
        )
    })
}

/// With a distance given (masses asked for), why the physics columns are left out, as the
/// summary's warning says it: for the catalogue's notes and the run record's warnings. A map
/// whose header names a unit cairn does not read was already warned about when it was read
/// (not one whose BUNIT is the dimensionless `1`, which says plainly that it has no unit).
fn physics_warning(ctx: &crate::score::Context, map: &Map, note: Option<&str>) -> Option<String> {
    let note = note?;
    let unit_warned = map.unit == Some(units::PixelUnit::Other)
        && map.unit_source == crate::map::Source::Header
        && units::parse_pixel_unit(&map.unit_text, units::ExtinctionBand::V).is_none();
    (ctx.distance_m.is_some() && !unit_warned).then(|| format!("no masses: {note}"))
}

/// The catalogue's parameters: the input (file, SHA-256, HDU, plane of a cube), the map's unit
/// (as read and as its BUNIT has it), the thresholds with how they were given, the noise, the
/// version, the common resolution and the physical assumptions ([`physics_meta`]). Each has a
/// type that does not change from run to run, a unit where it is a quantity (valid as a FITS
/// unit and as a VOUnit) and a description.
fn run_meta(map: &Map, o: &SegmentOptions, r: &Resolved, input_sha: &str) -> Vec<Param> {
    use ParamValue::{Float, Int, Text};
    let file_name = |p: &Path| {
        p.file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default()
    };
    let unit = map_unit(map);
    let mut v = vec![
        Param::new("input", Text(file_name(&map.path)), "", "input map"),
        Param::new(
            "input_sha256",
            Text(input_sha.to_string()),
            "",
            "SHA-256 of the input file",
        )
        .with_key("SHA256"),
        Param::new(
            "hdu",
            Int(map.hdu_index as i64),
            "",
            "HDU read, 0 for the primary",
        ),
    ];
    if let Some(k) = map.plane {
        v.push(Param::new(
            "plane",
            Int(k as i64),
            "",
            "zero-based plane of the cube read (--plane)",
        ));
    }
    v.push(Param::new(
        "unit",
        Text(unit.clone()),
        "",
        "unit of the map's values as read",
    ));
    // The header's unit as written, which `unit` may spell otherwise (`mag(AK)`, `JY/BEAM`).
    if let Some(b) = map.header.get_str("BUNIT") {
        v.push(
            Param::new(
                "bunit",
                Text(b.trim().to_string()),
                "",
                "the map's BUNIT as written",
            )
            .with_key("MAPBUNIT"),
        );
    }
    v.push(Param::new(
        "quantity",
        Text(
            map.unit
                .map(|u| u.kind_name())
                .unwrap_or("unknown")
                .to_string(),
        ),
        "",
        "what the map's values measure",
    ));
    v.push(Param::new(
        "floor",
        Float(r.floor),
        &unit,
        &format!("lowest level, given as {}", r.typed[0]),
    ));
    v.push(
        Param::new(
            "prominence",
            Float(r.prominence),
            &unit,
            &format!("least rise of a peak, given as {}", r.typed[1]),
        )
        .with_key("PROMINEN"),
    );
    v.push(Param::new(
        "min_area",
        Int(r.min_area_px as i64),
        "pixel2",
        &format!("least area of a leaf, given as {}", r.typed[2]),
    ));
    v.push(
        Param::new(
            "connectivity",
            Int(match o.connectivity {
                Connectivity::Four => 4,
                Connectivity::Eight => 8,
            }),
            "",
            "neighbours per pixel, 4 or 8",
        )
        .with_key("CONNECT"),
    );
    // A map without a measurable noise has none (the run record says why).
    if let Some(n) = r.noise {
        v.push(Param::new(
            "noise",
            Float(n),
            &unit,
            &format!("noise (1 sigma; {})", r.noise_source),
        ));
    }
    v.push(Param::new(
        "version",
        Text(env!("CARGO_PKG_VERSION").into()),
        "",
        "cairn version",
    ));
    if let Some(c) = &map.common_resolution {
        v.push(
            Param::new(
                "common_resolution",
                Float(units::as_given(
                    c.resolution_m / crate::physics::constants::PC,
                )),
                "pc",
                "linear resolution the map was smoothed to (the beam below is the smoothed one)",
            )
            .with_key("COMRES"),
        );
        v.push(
            Param::new(
                "regrid_block",
                Int(c.block as i64),
                "",
                "input pixels per side of one pixel of the smoothed map (1: not regridded)",
            )
            .with_key("REGRIDBL"),
        );
    }
    v.extend(physics_meta(&o.physics, map, &o.other_inputs));
    v
}

/// The physical assumptions among the catalogue's parameters. A temperature or non-thermal
/// dispersion given per pixel (`--temperature-map`, `--sigma-nt-map`) has no one value: the
/// numeric parameter (`temperature`, `sigma_nt`) is then left out, and `temperature_map` or
/// `sigma_nt_map` names the file (`other_inputs`), so that each parameter keeps its type.
fn physics_meta(
    ctx: &crate::score::Context,
    map: &Map,
    other_inputs: &[(String, PathBuf)],
) -> Vec<Param> {
    use ParamValue::{Float, Text};
    let mut v = vec![];
    // A map in a unit without conversion to column density is measured for its structure
    // alone: the assumptions that only the column densities, masses and physics use are left
    // out (the run record keeps all that was given).
    let converted = !matches!(map.unit, Some(units::PixelUnit::Other) | None);
    let file_of = |name: &str| {
        other_inputs
            .iter()
            .find(|(n, _)| n == name)
            .and_then(|(_, p)| p.file_name())
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default()
    };
    if let Some(d) = ctx.distance_m {
        v.push(Param::new(
            "distance",
            Float(units::as_given(d / crate::physics::constants::PC)),
            "pc",
            "distance",
        ));
    }
    if let Some(t) = ctx.temperature_k.as_ref().filter(|_| converted) {
        // On a dust-emission map the temperature sets the masses and the sound speed; on a
        // map of column density or extinction, the sound speed alone.
        let emission = map.unit.is_some_and(|u| u.is_emission());
        v.push(match t {
            crate::score::Field::Uniform(k) => Param::new(
                "temperature",
                Float(*k),
                "K",
                if emission {
                    "dust (and gas) temperature"
                } else {
                    "gas temperature (sound speed)"
                },
            )
            .with_key("TEMPERAT"),
            crate::score::Field::Map(_) => Param::new(
                "temperature_map",
                Text(file_of("temperature_map")),
                "",
                if emission {
                    "file of the dust (and gas) temperature per pixel"
                } else {
                    "file of the gas temperature per pixel (sound speed)"
                },
            )
            .with_key("TEMPMAP"),
        });
    }
    if let Some(b) = &map.beam {
        v.push(
            Param::new(
                "beam_major",
                Float(b.major_deg * 3600.0),
                "arcsec",
                "beam FWHM, major axis",
            )
            .with_key("BEAM_MAJ"),
        );
        v.push(
            Param::new(
                "beam_minor",
                Float(b.minor_deg * 3600.0),
                "arcsec",
                "beam FWHM, minor axis",
            )
            .with_key("BEAM_MIN"),
        );
        v.push(Param::new(
            "beam_pa",
            Float(b.pa_deg),
            "deg",
            "beam position angle east of north",
        ));
    }
    if map.unit.map(|u| u.is_emission()).unwrap_or(false) {
        v.push(Param::new(
            "kappa0",
            Float(ctx.opacity.kappa0_cm2_per_g),
            "cm2/g",
            "dust opacity per gram of gas at nu0",
        ));
        v.push(Param::new(
            "nu0",
            Float(ctx.opacity.nu0_hz),
            "Hz",
            "frequency of kappa0",
        ));
        v.push(Param::new(
            "beta",
            Float(ctx.opacity.beta),
            "",
            "dust emissivity index",
        ));
        if let Some(w) = map.wavelength_m {
            v.push(
                Param::new(
                    "wavelength",
                    Float(units::as_given(w * 1e6)),
                    "um",
                    "wavelength of the map",
                )
                .with_key("WAVELEN"),
            );
        }
    }
    if matches!(map.unit, Some(units::PixelUnit::Extinction { .. })) {
        v.push(
            Param::new(
                "nh2_per_av",
                Float(units::as_given(ctx.nh2_per_av_m2 * 1e-4)),
                "cm-2 mag-1",
                "N(H2) per mag of A_V",
            )
            .with_key("NH2PERAV"),
        );
        v.push(
            Param::new("av_per_ak", Float(ctx.av_per_ak), "", "A_V per mag of A_K")
                .with_key("AVPERAK"),
        );
    }
    if !converted {
        return v;
    }
    v.push(Param::new(
        "mu_h2",
        Float(ctx.mu_h2),
        "",
        "mean molecular weight per H2",
    ));
    v.push(Param::new(
        "mu_p",
        Float(ctx.mu_p),
        "",
        "mean molecular weight per particle",
    ));
    v.push(Param::new(
        "m_h",
        Float(crate::physics::constants::M_H_U),
        "u",
        "H atom mass, times mu_h2 and mu_p",
    ));
    if let Some(s) = &ctx.sigma_nt {
        v.push(match s {
            crate::score::Field::Uniform(ms) => Param::new(
                "sigma_nt",
                Float(ms / 1e3),
                "km/s",
                "non-thermal velocity dispersion",
            ),
            crate::score::Field::Map(_) => Param::new(
                "sigma_nt_map",
                Text(file_of("sigma_nt_map")),
                "",
                "file of sigma_nt per pixel",
            )
            .with_key("SIGNTMAP"),
        });
    }
    v
}

/// The physical context as recorded in run.json (also read by `compare`): assumptions, the
/// linear resolution (geometric-mean beam FWHM times distance) and the mass sensitivity (the
/// mass of one beam at the noise level, 1 sigma). Numbers are numbers with their unit in the
/// key's name (`temperature_k`, `sigma_nt_km_per_s`: null when given per pixel, whose file
/// `other_inputs` names); `temperature` is the temperature in words for reading (`14 K`,
/// `per pixel (map)`).
pub fn physics_record(
    ctx: &crate::score::Context,
    map: &Map,
    noise: Option<f64>,
    note: Option<&str>,
) -> serde_json::Value {
    use crate::physics::constants::{M_H, M_SUN, PC};
    let beam_arcsec = map
        .beam
        .map(|b| (b.major_deg * b.minor_deg).sqrt() * 3600.0);
    let resolution_pc = match (beam_arcsec, ctx.distance_m) {
        (Some(b), Some(d)) => Some(b * units::ARCSEC * d / PC),
        _ => None,
    };
    let sensitivity = crate::score::Converter::new(map, ctx).ok().and_then(|c| {
        let (d, n, b) = (ctx.distance_m?, noise?, map.beam?);
        let column = n * c.central_factor();
        Some(ctx.mu_h2 * M_H * column * b.solid_angle_sr() * d * d / M_SUN)
    });
    serde_json::json!({
        "distance_pc": ctx.distance_m.map(|d| units::as_given(d / PC)),
        "temperature": ctx.temperature_k.as_ref().map(|t| t.describe("K")),
        "temperature_k": match ctx.temperature_k { Some(crate::score::Field::Uniform(k)) => Some(k), _ => None },
        "opacity": { "kappa0_cm2_per_g": ctx.opacity.kappa0_cm2_per_g, "nu0_hz": ctx.opacity.nu0_hz, "beta": ctx.opacity.beta },
        "mu_h2": ctx.mu_h2,
        "mu_p": ctx.mu_p,
        "m_h_u": crate::physics::constants::M_H_U,
        "nh2_per_av_cm2": units::as_given(ctx.nh2_per_av_m2 * 1e-4),
        "av_per_ak": ctx.av_per_ak,
        "sigma_nt_km_per_s": match ctx.sigma_nt { Some(crate::score::Field::Uniform(ms)) => Some(units::as_given(ms / 1e3)), _ => None },
        "wavelength_um": map.wavelength_m.map(|w| units::as_given(w * 1e6)),
        "beam_fwhm_arcsec": beam_arcsec,
        "linear_resolution_pc": resolution_pc,
        "mass_sensitivity_msun": sensitivity,
        "note": note,
    })
}

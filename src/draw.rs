//! Figures of a run: the map with its leaves, beam, scale bar and colour bar, and the tree
//! diagram, from a run in memory or from a finished run's folder.
//!
//! Owns the bridge from cairn's data (map, label map, structures, states, distance) to the
//! plain-data figures of [`crate::render`]: which outlines are drawn (every leaf; with
//! `show_branches`, the outlines of the top-level structures that have children), the state
//! legend, the beam in pixels, and a scale bar of a round length in parsecs (about a fifth of
//! the shown width) when the distance is known.

use std::path::{Path, PathBuf};

use ndarray::{Array2, ArrayView2};

use crate::error::{Error, Result};
use crate::inspect::frame_name;
use crate::map::{self, LoadOptions, Map};
use crate::render::{self, LeafStyle, SkyAxes, StateLegend, Style, TreeNode};
use crate::units::{self, PixelUnit};
use crate::wcs::{SkyFrame, Wcs};

impl SkyAxes for Wcs {
    fn pixel_to_sky(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        Wcs::pixel_to_sky(self, x, y)
    }
    fn sky_to_pixel(&self, lon: f64, lat: f64) -> Option<(f64, f64)> {
        Wcs::sky_to_pixel(self, lon, lat)
    }
    fn equatorial(&self) -> bool {
        self.frame().is_equatorial()
    }
    fn pixel_scale_deg(&self) -> f64 {
        // At the reference of the figure: the geometric mean of the two axes at the centre of
        // the projection plane's first pixel is close enough for a scale bar and a beam; the
        // figure code asks at the point it needs when it can.
        let (sx, sy) = self.pixel_scale(0.0, 0.0);
        (sx * sy).sqrt()
    }
    fn pixel_scales_deg(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let (sx, sy) = self.pixel_scale(x, y);
        (sx.is_finite() && sy.is_finite() && sx > 0.0 && sy > 0.0).then_some((sx, sy))
    }
}

/// A map's WCS as the figure sees it, with the nominal pixel (the unit of the beam's size
/// given to the figure) measured at the centre of the shown part rather than at the first
/// pixel, which may lie off the sky of its projection.
struct FigureSky<'a> {
    wcs: &'a Wcs,
    /// The geometric mean of the pixel's sides at the centre of the shown part, in degrees.
    unit_deg: f64,
}

impl SkyAxes for FigureSky<'_> {
    fn pixel_to_sky(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        self.wcs.pixel_to_sky(x, y)
    }
    fn sky_to_pixel(&self, lon: f64, lat: f64) -> Option<(f64, f64)> {
        self.wcs.sky_to_pixel(lon, lat)
    }
    fn equatorial(&self) -> bool {
        SkyAxes::equatorial(self.wcs)
    }
    fn pixel_scale_deg(&self) -> f64 {
        self.unit_deg
    }
    fn pixel_scales_deg(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        SkyAxes::pixel_scales_deg(self.wcs, x, y)
    }
}

/// The states in legend order, with their words in the legend (in the figures' markup:
/// `_{...}` lowers the text) when the leaves' states come from both criteria (alpha_vir where
/// a velocity dispersion is known, alpha_BE elsewhere); [`state_words`] gives the words of a
/// run whose states all come from one. The unknown state's words are the run's own reason
/// ([`unknown_reason`]).
pub const STATES: [(&str, &str); 4] = [
    (
        "bound",
        "\u{3b1}_{BE} \u{2264} 1 (or \u{3b1}_{vir} \u{2264} 2)",
    ),
    ("marginal", "within a factor 2 of bound"),
    ("unbound", "further from bound"),
    ("unknown", "no distance or temperature"),
];

/// The legend's words for the state `name` (one of [`STATES`] but unknown) when the leaves'
/// states come from the virial parameter alone (`Some(true)`), from alpha_BE alone
/// (`Some(false)`), or from both (`None`; [`STATES`]' words).
pub fn state_words(name: &str, virial: Option<bool>) -> String {
    let (a, bound) = match virial {
        Some(true) => ("\u{3b1}_{vir}", 2),
        Some(false) => ("\u{3b1}_{BE}", 1),
        None => {
            return STATES
                .iter()
                .find(|(n, _)| *n == name)
                .map(|(_, d)| d.to_string())
                .unwrap_or_default();
        }
    };
    match name {
        "bound" => format!("{a} \u{2264} {bound}"),
        "marginal" => format!("{bound} < {a} \u{2264} {}", 2 * bound),
        _ => format!("{a} > {}", 2 * bound),
    }
}

/// Why the leaves of a run on `map` at `distance_pc` have no state, as far as the map and the
/// distance tell: the first of the map's unit having no conversion to mass, no sky
/// coordinates, no distance, no wavelength for a dust-emission map; else the stability ratio
/// needs what neither gives (a temperature, and a positive mass).
pub fn unknown_reason(map: &Map, distance_pc: Option<f64>) -> String {
    match map.unit {
        None | Some(PixelUnit::Other) => {
            return if map.unit_text.is_empty() {
                "the map is read with no unit, so no masses".into()
            } else {
                format!(
                    "the map's unit ({}) has no conversion to mass",
                    map.unit_text
                )
            };
        }
        Some(u) if u.is_emission() && map.wavelength_m.is_none() => {
            return "the map's wavelength is unknown, so no masses".into();
        }
        _ => {}
    }
    if map.wcs.is_none() {
        "the map has no sky coordinates, so no masses".into()
    } else if distance_pc.is_none() {
        "no distance, so no masses".into()
    } else {
        "no stability ratio (needs a temperature and a positive mass)".into()
    }
}

/// Why a run on `map` at `distance_pc` has no masses, as [`unknown_reason`] says it, where
/// that reason is not about the masses: then an emission map lacked its temperature.
fn no_mass_reason(map: &Map, distance_pc: Option<f64>) -> String {
    let r = unknown_reason(map, distance_pc);
    if !r.starts_with("no stability") {
        r
    } else if map.unit.is_some_and(|u| u.is_emission()) {
        "a dust-emission map's masses need --temperature or --temperature-map".into()
    } else {
        "no leaf has a positive mass".into()
    }
}

/// A unit's text with its negative powers raised (`cm-2` becomes `cm^-2`), as the figures'
/// markup writes exponents.
pub fn unit_markup(text: &str) -> String {
    let chars: Vec<char> = text.chars().collect();
    let mut out = String::with_capacity(text.len() + 4);
    for (i, &c) in chars.iter().enumerate() {
        // A unit's letters (not a number's exponent, as in 1e-3) followed by -digits.
        let letters = chars[..i]
            .iter()
            .rev()
            .take_while(|l| l.is_ascii_alphabetic())
            .count();
        let after_number = i > letters && chars[i - letters - 1].is_ascii_digit();
        if c == '-'
            && letters > 0
            && !after_number
            && chars.get(i + 1).is_some_and(|d| d.is_ascii_digit())
        {
            out.push('^');
        }
        out.push(c);
    }
    out
}

fn state_index(s: Option<&str>) -> usize {
    match s {
        Some("bound") => 0,
        Some("marginal") => 1,
        Some("unbound") => 2,
        _ => 3,
    }
}

/// Which leaves of a map figure get a label (every leaf is outlined whatever the choice),
/// and which carry their id in the tree diagram. Labels are placed brightest peak first, so
/// on a crowded map (or tree) the ones left without room are the faintest.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum LabelChoice {
    /// Every leaf.
    #[default]
    All,
    /// None: outlines only.
    None,
    /// The leaves in these states (indices into [`STATES`]).
    States(Vec<usize>),
    /// The leaves of the N highest peaks (equal peaks by id).
    Brightest(usize),
    /// The leaves of at least this mass, in solar masses.
    MassAtLeast(f64),
}

impl LabelChoice {
    /// Reads `--labels`: `all`, `none`, states separated by commas (`bound` or
    /// `bound,marginal`), a count of the highest peaks (`30`), or a least mass (`2Msun`).
    pub fn parse(text: &str) -> Result<LabelChoice> {
        let t = text.trim();
        let bad = |why: &str| {
            Error::usage(format!(
                "--labels '{text}' {why}: give all, none, states such as bound or bound,marginal, a number of leaves (the highest peaks) such as 30, or a least mass such as 2Msun."
            ))
        };
        match t.to_ascii_lowercase().as_str() {
            "all" => return Ok(LabelChoice::All),
            "none" => return Ok(LabelChoice::None),
            _ => {}
        }
        if t.starts_with(|c: char| c.is_ascii_alphabetic()) {
            let mut states = Vec::new();
            for w in t.split(',') {
                let w = w.trim().to_ascii_lowercase();
                let Some(k) = STATES.iter().position(|(n, _)| *n == w) else {
                    return Err(bad(&format!(
                        "names '{w}', which is no state (bound, marginal, unbound or unknown)"
                    )));
                };
                if !states.contains(&k) {
                    states.push(k);
                }
            }
            states.sort_unstable();
            return Ok(LabelChoice::States(states));
        }
        if let Ok(n) = t.parse::<usize>() {
            return Ok(LabelChoice::Brightest(n));
        }
        // In solar masses as typed, so that a mass copied from a catalogue keeps every digit.
        if let Some(m) = ["Msun", "Msol"]
            .iter()
            .find_map(|u| t.strip_suffix(u))
            .and_then(|n| n.trim().parse::<f64>().ok())
            .filter(|m| m.is_finite())
        {
            return if m >= 0.0 {
                Ok(LabelChoice::MassAtLeast(m))
            } else {
                Err(bad("is not a mass of zero or more"))
            };
        }
        match units::parse_quantity(t, &[units::Dimension::Mass], "--labels") {
            Ok(q) if q.si.is_finite() && q.si >= 0.0 => Ok(LabelChoice::MassAtLeast(
                units::as_given(q.si / units::M_SUN),
            )),
            Ok(_) => Err(bad("is not a mass of zero or more")),
            Err(_) => Err(bad("is not understood")),
        }
    }

    /// Whether the choice needs the leaves' masses.
    pub fn needs_masses(&self) -> bool {
        matches!(self, LabelChoice::MassAtLeast(_))
    }

    /// Whether the choice needs the leaves' gravitational states (states other than
    /// `unknown`).
    pub fn needs_states(&self) -> bool {
        matches!(self, LabelChoice::States(k) if !k.contains(&3))
    }
}

/// Why a run on `map` at `distance_pc`, with or without a gas `temperature`, would have no
/// masses (`states`: or no gravitational states), as far as can be known before the run;
/// None when it would have them.
pub fn no_masses_before_run(
    map: &Map,
    distance_pc: Option<f64>,
    temperature: bool,
    states: bool,
) -> Option<String> {
    let r = unknown_reason(map, distance_pc);
    if !r.starts_with("no stability") {
        return Some(r);
    }
    if map.unit.is_some_and(|u| u.is_emission()) && !temperature {
        return Some("a dust-emission map's masses need --temperature or --temperature-map".into());
    }
    if states && !temperature {
        return Some("the states need a gas temperature, --temperature".into());
    }
    None
}

/// The leaves of `structures` in the order their labels are placed (highest peak first,
/// equal peaks by id), each with its label: its id, or empty when `choice` leaves it out.
/// With a `region` (x0, y0, width, height), the N highest peaks of [`LabelChoice::Brightest`]
/// are those of the leaves whose peak lies in it.
pub fn leaf_labels<'a>(
    structures: &'a [FigStructure],
    choice: &LabelChoice,
    region: Option<(usize, usize, usize, usize)>,
) -> Vec<(&'a FigStructure, String)> {
    let mut leaves: Vec<&FigStructure> = structures.iter().filter(|s| s.is_leaf).collect();
    leaves.sort_by(|a, b| b.peak_value.total_cmp(&a.peak_value).then(a.id.cmp(&b.id)));
    let shown = |s: &FigStructure| {
        region.is_none_or(|(x0, y0, w, h)| {
            (x0..x0 + w).contains(&s.peak.0) && (y0..y0 + h).contains(&s.peak.1)
        })
    };
    let mut rank = 0;
    leaves
        .into_iter()
        .map(|s| {
            let chosen = match choice {
                LabelChoice::All => true,
                LabelChoice::None => false,
                LabelChoice::States(k) => k.contains(&state_index(s.state.as_deref())),
                LabelChoice::Brightest(n) => shown(s) && rank < *n,
                LabelChoice::MassAtLeast(m) => s.mass_msun.is_some_and(|x| x >= *m),
            };
            if shown(s) {
                rank += 1;
            }
            (
                s,
                if chosen {
                    s.id.to_string()
                } else {
                    String::new()
                },
            )
        })
        .collect()
}

/// What a figure needs to know of one structure.
#[derive(Debug, Clone)]
pub struct FigStructure {
    /// Id.
    pub id: u32,
    /// Parent id.
    pub parent: Option<u32>,
    /// Whether it has no children.
    pub is_leaf: bool,
    /// Peak pixel.
    pub peak: (usize, usize),
    /// Peak value.
    pub peak_value: f64,
    /// Merge level (the floor for top-level structures).
    pub merge_level: f64,
    /// State word, when known.
    pub state: Option<String>,
    /// Whether the state comes from the virial parameter (a velocity dispersion was known),
    /// rather than from alpha_BE.
    pub by_virial: bool,
    /// Mass in solar masses, when known (finite).
    pub mass_msun: Option<f64>,
}

/// Everything the figures of a run draw from.
pub struct FigureInput<'a> {
    /// The map.
    pub map: &'a Map,
    /// Smallest structure per pixel, -1 for none.
    pub labels: ArrayView2<'a, i32>,
    /// The structures, indexed by id.
    pub structures: Vec<FigStructure>,
    /// Distance in pc, if known.
    pub distance_pc: Option<f64>,
    /// A title.
    pub title: Option<String>,
    /// Which leaves get a label, on the map figure and in the tree diagram alike.
    pub label_choice: LabelChoice,
}

/// A round scale-bar length in pc near a fifth of `width_pc` (at most that fifth).
pub fn scale_bar_length(width_pc: f64) -> f64 {
    let target = width_pc / 5.0;
    let mut best = 0.001;
    for exp in -3..=3 {
        for m in [1.0, 2.0, 5.0] {
            let v = m * 10f64.powi(exp);
            if v <= target {
                best = v;
            }
        }
    }
    best
}

/// The title of the map figure's colour bar and of the tree diagram's level axis: the
/// quantity with its unit (N(H_2), A_V, A_K), or the unit alone for maps of other kinds, its
/// powers raised.
fn unit_label(map: &Map) -> String {
    match map.unit {
        Some(PixelUnit::ColumnDensity { .. }) => {
            format!("N(H_2) [{}]", unit_markup(&crate::segment::map_unit(map)))
        }
        Some(PixelUnit::Extinction {
            band: units::ExtinctionBand::V,
        }) => "A_V [mag]".into(),
        Some(PixelUnit::Extinction {
            band: units::ExtinctionBand::K,
        }) => "A_K [mag]".into(),
        // Common practice: I for a surface brightness, S for a flux density (per beam or per
        // pixel), with the wavelength as its index when it is known.
        Some(PixelUnit::SurfaceBrightness { .. }) => format!(
            "I_{{{}}} [{}]",
            band_name(map.wavelength_m),
            unit_markup(&crate::segment::map_unit(map))
        ),
        Some(PixelUnit::FluxPerBeam { .. }) | Some(PixelUnit::FluxPerPixel { .. }) => format!(
            "S_{{{}}} [{}]",
            band_name(map.wavelength_m),
            unit_markup(&crate::segment::map_unit(map))
        ),
        Some(PixelUnit::Other) | None => unit_markup(&crate::segment::map_unit(map)),
    }
}

/// The band of an emission map for its quantity's index: the wavelength in µm below a
/// millimetre and in mm from it (`850 µm`, `1.3 mm`), to four significant digits; ν when the
/// wavelength is not known.
fn band_name(wavelength_m: Option<f64>) -> String {
    match wavelength_m.filter(|w| w.is_finite() && *w > 0.0) {
        Some(w) => {
            let (v, unit) = if w < 1e-3 {
                (w * 1e6, "µm")
            } else {
                (w * 1e3, "mm")
            };
            let digits: f64 = format!("{v:.3e}").parse().unwrap_or(v);
            format!("{digits} {unit}")
        }
        None => "ν".to_string(),
    }
}

/// Centre and local pixel sides along x and y (degrees) of the shown part of the map.
fn shown_centre(
    map: &Map,
    region: Option<(usize, usize, usize, usize)>,
) -> ((f64, f64), Option<(f64, f64)>) {
    let (ny, nx) = map.data.dim();
    let c = match region {
        Some((x0, y0, w, h)) => (x0 as f64 + w as f64 / 2.0, y0 as f64 + h as f64 / 2.0),
        None => ((nx as f64 - 1.0) / 2.0, (ny as f64 - 1.0) / 2.0),
    };
    let deg = map
        .wcs
        .as_ref()
        .and_then(|w| SkyAxes::pixel_scales_deg(w, c.0, c.1));
    (c, deg)
}

/// The map's WCS for the figure of the shown part, with its nominal pixel measured there;
/// None without a WCS or where the pixel's size cannot be measured at the shown centre.
fn figure_sky(map: &Map, region: Option<(usize, usize, usize, usize)>) -> Option<FigureSky<'_>> {
    let (_, p) = shown_centre(map, region);
    let (sx, sy) = p?;
    Some(FigureSky {
        wcs: map.wcs.as_ref()?,
        unit_deg: (sx * sy).sqrt(),
    })
}

/// The beam as the figure takes it ([`render::Overlay::beam`]): major and minor FWHM in units
/// of the geometric mean of the pixel's sides at the centre of the shown part, and the PA
/// east of north; none where that cannot be measured (a centre off the sky of its projection).
fn figure_beam(map: &Map, sky: Option<&FigureSky>) -> Option<(f64, f64, f64)> {
    let (b, u) = (map.beam?, sky?.unit_deg);
    Some((b.major_deg / u, b.minor_deg / u, b.pa_deg))
}

/// The beam's ellipse on the pixel grid at the centre of the shown part, as the figure draws
/// it: on pixels of unequal sides on the sky it keeps its shape on the sky (an 18" beam on
/// 4" x 8" pixels is 4.5 pixels wide and 2.25 tall). None without a beam, or where the pixel
/// scale cannot be measured there (a centre off the sky of its projection).
pub fn beam_px(
    map: &Map,
    region: Option<(usize, usize, usize, usize)>,
) -> Option<render::BeamGeometry> {
    let sky = figure_sky(map, region)?;
    let (maj, min, pa) = figure_beam(map, Some(&sky))?;
    let (c, _) = shown_centre(map, region);
    Some(render::beam_geometry(maj, min, pa, Some(&sky), c))
}

/// The scale bar: its length in pixels along x and its text, a round number of parsecs near a
/// fifth of the shown width, or of eight times the shown height where that is less (a flat
/// strip; needs a distance and a WCS). The length is measured with the
/// pixel's side along x at the centre of the shown part, so it is right on maps of pixels
/// that are not square.
pub fn scale_bar(
    map: &Map,
    distance_pc: Option<f64>,
    region: Option<(usize, usize, usize, usize)>,
) -> Option<(f64, String)> {
    let (_, p) = shown_centre(map, region);
    let (d, (sx, sy)) = (distance_pc?, p?);
    let pc_per_px = d * sx.to_radians();
    let shown_width_px = region.map(|r| r.2).unwrap_or(map.nx()) as f64;
    let shown_height_px = region.map(|r| r.3).unwrap_or(map.ny()) as f64;
    // A fifth of the width; of a very wide map's, as if it were eight times as wide as tall,
    // so that the bar finds room between the structures of a flat strip.
    let width_pc = (shown_width_px * pc_per_px).min(8.0 * shown_height_px * d * sy.to_radians());
    let len = scale_bar_length(width_pc);
    Some((len / pc_per_px, format!("{len} pc")))
}

/// The frames a `--region` centre may name before it (`icrs:`, `fk5:` for FK5 at equinox
/// J2000, `galactic:` or `gal:`), the frame names of `synth --frame`; the centre is converted
/// from there to the map's frame ([`crate::wcs::convert_frame`]).
fn region_frame(name: &str) -> Option<SkyFrame> {
    match name.trim().to_ascii_lowercase().as_str() {
        "icrs" => Some(SkyFrame::Icrs),
        "fk5" => Some(SkyFrame::Fk5 { equinox: 2000.0 }),
        "galactic" | "gal" => Some(SkyFrame::Galactic),
        _ => None,
    }
}

/// The map frame's coordinates in sentences (equatorial RA,Dec; galactic l,b).
fn frame_coordinates(frame: &SkyFrame) -> &'static str {
    match frame {
        SkyFrame::Galactic => "galactic l,b",
        SkyFrame::Icrs | SkyFrame::Fk5 { .. } | SkyFrame::Fk4 { .. } => "equatorial RA,Dec",
        _ => "its own longitude,latitude",
    }
}

/// Whether pixel (x, y) lies on the map (inside its outer pixel edges).
fn on_map(map: &Map, x: f64, y: f64) -> bool {
    x > -0.5 && y > -0.5 && x < map.nx() as f64 - 0.5 && y < map.ny() as f64 - 0.5
}

/// A `--region` size for an angle in degrees, to three significant digits: in arcsec below
/// 2', in arcmin below 2 deg (`180"` is `3arcmin`, `119.99"` is `2arcmin`).
fn angle_size_text(deg: f64) -> String {
    // Below 119.95 (which three digits would write as 120) in the smaller unit.
    let (v, unit) = if deg * 3600.0 < 119.95 {
        (deg * 3600.0, "arcsec")
    } else if deg * 60.0 < 119.95 {
        (deg * 60.0, "arcmin")
    } else {
        (deg, "deg")
    };
    let decimals = (2 - v.log10().floor() as i32).max(0) as usize;
    let mut s = format!("{v:.decimals$}");
    if s.contains('.') {
        s = s.trim_end_matches('0').trim_end_matches('.').to_string();
    }
    format!("{s}{unit}")
}

/// What a `--region` asks for, before it is fitted to the map ([`region_asked`]).
#[derive(Debug, Clone, PartialEq)]
pub struct RegionAsked {
    /// The centre in pixels (zero-based), as given or placed from the sky.
    pub centre: (f64, f64),
    /// The sides in pixels along x and y, before rounding.
    pub size: (f64, f64),
    /// A warning for the user: a pixel centre whose two numbers are also, in degrees, a sky
    /// position on the map.
    pub note: Option<String>,
}

/// Reads a `--region` given as `[FRAME:]X,Y,SIZE`. The size's unit and the centre go
/// together:
///
/// * a pixel centre (two plain numbers, zero-based) with a size in pixels (256,192,100px; a
///   size without a unit is in pixels too); the centre must lie on the map, and one off the
///   map whose numbers in degrees are a sky position on it is refused with a sentence saying
///   that the centre is read as pixels because of the size's unit, and the angular size to
///   give instead;
/// * a sky centre with an angular size (152.81,11.40,5arcmin), square on the sky (each side
///   in pixels of that axis's own length at the centre, so on pixels of unequal sides the box
///   has unequal sides in pixels). The centre is in degrees or sexagesimal: with letters
///   (10h11m15s,+11d24m22.5s, or 152d48m45s) or with colons (10:11:15,+11:24:22.5), whose
///   longitude is in hours (only for a right ascension) and latitude in degrees. It is in the
///   map's own frame unless a frame is named first, `icrs:`, `fk5:` (equinox J2000) or
///   `galactic:` (`gal:`), from which it is converted to the map's frame; it must fall on the
///   map. A sky centre with a size in pixels is refused.
pub fn region_asked(text: &str, map: &Map) -> Result<RegionAsked> {
    let bad = || {
        Error::usage(format!(
            "--region '{text}' is not understood: give X,Y,SIZE such as 256,192,100px (pixels), 152.81,11.40,5arcmin, 10h11m15s,+11d24m,5arcmin or 10:11:15,+11:24:00,5arcmin (the sky in the map's frame, the longitude in hours for a right ascension only), or a frame first, such as galactic:231.5,-4.25,5arcmin."
        ))
    };
    // A frame named first: a word before the first colon (a sexagesimal field never starts
    // with a letter).
    let (given, body) = match text.split_once(':') {
        Some((name, rest))
            if name.trim().starts_with(|c: char| c.is_ascii_alphabetic())
                && name.trim().chars().all(|c| c.is_ascii_alphanumeric()) =>
        {
            let frame = region_frame(name).ok_or_else(|| {
                Error::usage(format!(
                    "--region '{text}' names a frame '{}' that is not understood: give icrs, fk5 (J2000) or galactic before the centre, such as icrs:152.81,11.40,5arcmin, or no frame for the map's own.",
                    name.trim()
                ))
            })?;
            (Some(frame), rest)
        }
        _ => (None, text),
    };
    let parts: Vec<&str> = body.split(',').collect();
    if parts.len() != 3 {
        return Err(bad());
    }
    // A centre in pixels is two plain numbers; on the sky, degrees or sexagesimal, or any
    // centre with its frame named.
    let sky = given.is_some()
        || !crate::angles::is_plain_number(parts[0])
        || !crate::angles::is_plain_number(parts[1]);
    let no_wcs = || {
        Error::usage(
            "--region with a sky centre needs a map with a celestial WCS; give the centre and size in pixels.",
        )
    };
    let map_frame = map.wcs.as_ref().map(|w| w.frame());
    if sky && map_frame.is_none() {
        return Err(no_wcs());
    }
    // Hours (letters or colons) only for the longitude of an equatorial frame: the one named,
    // else the map's.
    let centre_frame = given.as_ref().or(map_frame);
    let hours = centre_frame.is_some_and(SkyFrame::is_equatorial);
    if let Some(f) = centre_frame.filter(|_| !hours && crate::angles::has_colons(parts[0])) {
        return Err(Error::usage(format!(
            "--region '{text}' gives its longitude with colons, which are read as hours of right ascension, but the centre is in the {} frame; give the longitude in degrees, such as 152.8125 or 152d48m45s, or an RA,Dec centre with icrs: first.",
            frame_name(f)
        )));
    }
    let a = crate::angles::parse_longitude(parts[0], hours).ok_or_else(bad)?;
    let b = crate::angles::parse_latitude(parts[1]).ok_or_else(bad)?;
    let size = units::parse_quantity(
        parts[2],
        &[
            units::Dimension::Pixels,
            units::Dimension::Pure,
            units::Dimension::Angle,
        ],
        "--region",
    )
    .map_err(Error::usage)?;
    if sky && size.dim != units::Dimension::Angle {
        return Err(Error::usage(format!(
            "--region '{text}' has a sky centre, so its size is an angle; give one, such as 5arcmin."
        )));
    }
    if size.dim != units::Dimension::Angle {
        return pixel_region(text, map, (a, b), size.si, size.dim, &parts);
    }
    let w = map.wcs.as_ref().ok_or_else(no_wcs)?;
    let frame = w.frame();
    let deg = size.si.to_degrees();
    // In the map's frame: converted from the one named, when it is another.
    let (l, b2) = match given.as_ref().filter(|f| *f != frame) {
        Some(f) => crate::wcs::convert_frame(a, b, f, frame).ok_or_else(|| {
            Error::usage(format!(
                "--region '{text}' gives its centre in {}, which cairn does not convert to the map's frame ({}); give the centre in the map's own frame, without a frame first.",
                frame_name(f),
                frame_name(frame)
            ))
        })?,
        None => (a, b),
    };
    let placed = w.sky_to_pixel(l, b2);
    let (x, y) = match placed {
        Some((x, y)) if on_map(map, x, y) => (x, y),
        _ => {
            let whence = match placed {
                Some((x, y)) => format!("falls off the map (at pixel {x:.0},{y:.0})"),
                None => "is outside the map's projection".into(),
            };
            let hint = off_map_hint(map, &given, &parts, deg);
            return Err(Error::usage(match &given {
                Some(f) => format!(
                    "--region centre {a},{b} ({}) is {l:.6},{b2:.6} in the map's frame ({}) and {whence}{hint}.",
                    frame_name(f),
                    frame_name(frame)
                ),
                None => format!(
                    "--region centre {a},{b} {whence}; a sky centre is read in degrees in the map's own frame ({}){hint}.",
                    frame_coordinates(frame)
                ),
            }));
        }
    };
    // Square on the sky: each side in pixels of that axis's own length there.
    let (sx, sy) = w.pixel_scale(x, y);
    Ok(RegionAsked {
        centre: (x, y),
        size: (deg / sx, deg / sy),
        note: None,
    })
}

/// The end of the sentence refusing a sky centre off the map: the way to give it that would
/// land on the map, tried in turn (the same numbers as a centre in the frame of the other
/// kind, equatorial or galactic; in the map's own frame when a frame was named; as pixels with
/// the size in pixels), else how to name another frame.
fn off_map_hint(map: &Map, given: &Option<SkyFrame>, parts: &[&str], deg: f64) -> String {
    let Some(w) = map.wcs.as_ref() else {
        return String::new();
    };
    let frame = w.frame();
    let lands = |from: &SkyFrame| -> bool {
        let hours = from.is_equatorial();
        let (Some(lon), Some(lat)) = (
            crate::angles::parse_longitude(parts[0], hours),
            crate::angles::parse_latitude(parts[1]),
        ) else {
            return false;
        };
        let converted = if from == frame {
            Some((lon, lat))
        } else {
            crate::wcs::convert_frame(lon, lat, from, frame)
        };
        converted
            .and_then(|(l, b)| w.sky_to_pixel(l, b))
            .is_some_and(|(x, y)| on_map(map, x, y))
    };
    let centre = format!(
        "{},{},{}",
        parts[0].trim(),
        parts[1].trim(),
        parts[2].trim()
    );
    let other = match (given, frame) {
        (None, SkyFrame::Galactic) => Some(("icrs", SkyFrame::Icrs)),
        (None, f) if f.is_equatorial() => Some(("galactic", SkyFrame::Galactic)),
        _ => None,
    };
    if let Some((prefix, f)) = &other
        && lands(f)
    {
        return format!(
            ", and as {} coordinates these fall on the map: give {prefix}:{centre}",
            frame_name(f)
        );
    }
    if given.is_some() && lands(frame) {
        return format!(
            ", and without the frame, in the map's own ({}), these fall on the map: give {centre}",
            frame_name(frame)
        );
    }
    let (a, b) = (parts[0].trim(), parts[1].trim());
    if given.is_none()
        && let (Ok(x), Ok(y)) = (a.parse::<f64>(), b.parse::<f64>())
        && on_map(map, x, y)
    {
        let (sx, sy) = w.pixel_scale(x, y);
        let px = (deg / (sx * sy).sqrt()).round();
        if px.is_finite() && px >= 1.0 {
            return format!(", and a pixel centre needs a size in pixels, such as {a},{b},{px}px");
        }
    }
    match other {
        Some((prefix, _)) => format!(
            " unless another is named first (icrs:, fk5: or galactic:, such as {prefix}:LON,LAT,SIZE)"
        ),
        None => String::new(),
    }
}

/// A region with a pixel centre at `(a, b)` and a size of `size` pixels (`dim`: given in
/// pixels, or as a plain number): the centre must lie on the map.
fn pixel_region(
    text: &str,
    map: &Map,
    (a, b): (f64, f64),
    size: f64,
    dim: units::Dimension,
    parts: &[&str],
) -> Result<RegionAsked> {
    let (nx, ny) = (map.nx(), map.ny());
    // The same two numbers as a sky position in degrees in the map's frame, where it is on
    // the map, with the size in pixels as an angle there.
    let as_sky = map.wcs.as_ref().and_then(|w| {
        let (x, y) = w.sky_to_pixel(a, b)?;
        if !on_map(map, x, y) {
            return None;
        }
        let (sx, sy) = w.pixel_scale(x, y);
        let deg = size * (sx * sy).sqrt();
        let angle = if deg.is_finite() && deg > 0.0 {
            angle_size_text(deg)
        } else {
            "5arcmin".into()
        };
        Some(format!("{},{},{angle}", parts[0].trim(), parts[1].trim()))
    });
    let unit = if dim == units::Dimension::Pixels {
        "in px"
    } else {
        "a plain number, read as pixels"
    };
    if !on_map(map, a, b) {
        return Err(Error::usage(match as_sky {
            Some(sky) => format!(
                "--region '{text}' has its centre read as pixels because its size is {unit}, and pixel {a},{b} lies off the map of {nx} x {ny} pixels; for a sky centre in degrees give an angular size, such as {sky} (what {} spans there).",
                parts[2].trim()
            ),
            None => format!(
                "--region '{text}' has its pixel centre {a},{b} off the map, whose pixels run x 0 to {} and y 0 to {} (zero-based); centre it on the map, or give a sky centre with an angular size, such as 152.81,11.40,5arcmin.",
                nx - 1,
                ny - 1
            ),
        }));
    }
    let note = as_sky.map(|sky| {
        format!(
            "--region '{text}' is read as a pixel centre because its size is {unit}, though {a},{b} in degrees is also a sky position on the map; for that one give an angular size, such as {sky}"
        )
    });
    Ok(RegionAsked {
        centre: (a, b),
        size: (size, size),
        note,
    })
}

/// A `--region` ([`region_asked`]) fitted to the map: (x0, y0, width, height) in pixels,
/// clipped to the map, and what the user should be told (one sentence a line): for a region
/// reaching past the map's edge, what part of it is drawn, and [`RegionAsked::note`].
pub fn parse_region(text: &str, map: &Map) -> Result<(render::Region, Option<String>)> {
    let asked = region_asked(text, map)?;
    let ((cx, cy), size) = (asked.centre, asked.size);
    let (nx, ny) = (map.nx() as f64, map.ny() as f64);
    // The size in whole pixels first, then its place: a size of a whole number of pixels
    // stays that size whatever the rounding of its edges.
    let (w, h) = (size.0.round(), size.1.round());
    let (ax0, ay0) = ((cx - w / 2.0).round(), (cy - h / 2.0).round());
    let (ax1, ay1) = (ax0 + w, ay0 + h);
    let (x0, y0, x1, y1) = (ax0.max(0.0), ay0.max(0.0), ax1.min(nx), ay1.min(ny));
    if !(x1 - x0 >= 4.0 && y1 - y0 >= 4.0) {
        return Err(Error::usage(format!(
            "--region '{text}' leaves less than 4 pixels of the map to draw; centre it on the map and give a larger size."
        )));
    }
    let clipped = (x0 > ax0 || y0 > ay0 || x1 < ax1 || y1 < ay1).then(|| {
        format!(
            "--region '{text}' reaches past the map's edge, so only its part on the map is drawn: {} x {} of the {} x {} pixels asked for (x {} to {}, y {} to {}, zero-based)",
            x1 - x0,
            y1 - y0,
            ax1 - ax0,
            ay1 - ay0,
            x0,
            x1 - 1.0,
            y0,
            y1 - 1.0
        )
    });
    let notes: Vec<String> = asked.note.into_iter().chain(clipped).collect();
    Ok((
        (
            x0 as usize,
            y0 as usize,
            (x1 - x0) as usize,
            (y1 - y0) as usize,
        ),
        (!notes.is_empty()).then(|| notes.join("\n")),
    ))
}

/// With `--stretch log`, a sentence saying so when the lower colour limit of the shown part
/// is not positive, where a logarithm of the values cannot be taken and the figure uses
/// log(1 + 1000 t) of the linear position t between the limits instead
/// ([`render::Stretch::Log`]). None for other stretches, positive limits, or a region with no
/// finite value (refused when drawing).
pub fn log_stretch_note(map: &Map, style: &Style) -> Option<String> {
    if style.stretch != render::Stretch::Log {
        return None;
    }
    let (ny, nx) = map.data.dim();
    let (x0, y0, w, h) = style.region.unwrap_or((0, 0, nx, ny));
    let view = map.data.slice(ndarray::s![y0..y0 + h, x0..x0 + w]);
    let (lo, hi) = render::raster::display_limits(view, style.limits).ok()?;
    (lo <= 0.0).then(|| {
        format!(
            "--stretch log: the lower colour limit ({lo:.4e}) is not positive, so the colours follow log(1 + 1000 t) of the linear position t from {lo:.4e} to {hi:.4e} instead of the logarithm of the values; give --range with a positive lower limit (or higher --limits) for a logarithmic scale"
        )
    })
}

/// Checks that the map figure of `map` fits the width of `style` (room for
/// the map beside its axis and colour-bar labels), as drawing it would decide, without a run:
/// so that a width too narrow is refused with the narrowest that works before any work is
/// done. The width is spoken of as given with `--width`; see [`check_figure_fits`].
pub fn check_figure_style(map: &Map, style: &Style) -> Result<()> {
    check_figure_fits(map, style, true, false)
}

/// [`check_figure_style`], its refusal in the words of the command line: `width_given`,
/// whether `--width` was given (else the width is the default, and is said so);
/// `can_skip`, whether the command can leave the figure out (`segment --no-figure`). A map
/// that needs a figure wider than the widest cairn draws ([`render::MAX_WIDTH_PX`]; its
/// axis labels may be that long on a map whose sky coordinates are odd) is not sent to a
/// larger `--width`: a lower `--dpi` is suggested if one leaves it room, and otherwise
/// leaving out the figure, or a part of the map with `--region`.
pub fn check_figure_fits(
    map: &Map,
    style: &Style,
    width_given: bool,
    can_skip: bool,
) -> Result<()> {
    let none = [-1i32];
    let one = ndarray::aview1(&none);
    let labels = one
        .broadcast(map.data.dim())
        .ok_or_else(|| Error::internal("a label map of the map's shape could not be made"))?;
    let overlay = render::Overlay {
        map: map.data.view(),
        unit_label: unit_label(map),
        labels,
        branch_labels: None,
        branch_of: None,
        leaves: Vec::new(),
        states: Vec::new(),
        sky: map.wcs.as_ref().map(|w| w as &dyn SkyAxes),
        beam: None,
        scale_bar: None,
        title: None,
        name: None,
    };
    // Only the width is judged here; anything else the layout refuses is said when drawing.
    let Some(needed) = narrowest_fitting(&overlay, style) else {
        return Ok(());
    };
    let (width, dpi) = (style.width_px, style.dpi);
    let widest = render::MAX_WIDTH_PX;
    let asked = if width_given {
        format!("--width {width} at --dpi {dpi} leaves")
    } else {
        format!("the default figure width ({width} pixels) at --dpi {dpi} leaves")
    };
    if needed <= widest {
        return Err(Error::usage(format!(
            "{asked} no room for the map beside its axis and colour-bar labels: this map needs a figure at least {needed} pixels wide at that resolution; give --width {needed} or more (at most {widest}), or a lower --dpi."
        )));
    }
    // A narrower figure has fewer ticks, whose labels may be shorter: the narrowest width
    // that leaves room, counted from the narrowest figure at this resolution.
    let start = render::narrowest_width_px(dpi).clamp(200, widest);
    let narrower = narrowest_fitting(
        &overlay,
        &Style {
            width_px: start,
            ..style.clone()
        },
    )
    // None: the narrowest figure itself fits.
    .or(Some(start))
    .filter(|&n| n <= widest)
    .map(|n| format!("--width {n} (whose fewer axis ticks leave room) or "))
    .unwrap_or_default();
    // Text scales with the resolution: the lowest --dpi may leave the labels room.
    let least_dpi = 30.0;
    let lower_dpi = match narrowest_fitting(
        &overlay,
        &Style {
            dpi: least_dpi,
            ..style.clone()
        },
    ) {
        None => Some(format!("--dpi {least_dpi}")),
        Some(n) if n <= widest => Some(format!("--dpi {least_dpi} with --width {n} or more")),
        Some(_) => None,
    };
    let fix = match (lower_dpi, can_skip) {
        (Some(d), true) => format!(
            "give {narrower}a lower resolution, such as {d}, or --no-figure (and draw a --region of the map later with cairn draw)"
        ),
        (Some(d), false) => {
            format!("give {narrower}a lower resolution, such as {d}, or draw a --region of the map")
        }
        (None, true) => format!(
            "give {narrower}--no-figure (and draw a --region of the map later with cairn draw, if a part of it leaves the labels room)"
        ),
        (None, false) => {
            format!("give {narrower}a --region of the map, if a part of it leaves the labels room")
        }
    };
    Err(Error::usage(format!(
        "{asked} no room for the map beside its axis and colour-bar labels: this map needs a figure at least {needed} pixels wide at that resolution, more than the widest cairn draws ({widest}); {fix}."
    )))
}

/// The narrowest width, from `style`'s, at which the map figure of `overlay` leaves room for
/// the map beside its labels, or None when `style`'s width does. The width the layout says
/// it needs is tried in turn, as more room may bring longer tick labels (a map whose sky
/// coordinates are odd); past [`render::MAX_WIDTH_PX`] the first such width is returned.
fn narrowest_fitting(overlay: &render::Overlay, style: &Style) -> Option<u32> {
    let mut w = style.width_px;
    // A few rounds settle it; the limit only keeps a layout that never settles finite.
    for _ in 0..16 {
        match render::overlay_layout(
            overlay,
            &Style {
                width_px: w,
                ..style.clone()
            },
        ) {
            Err(render::RenderError::TooNarrow { needed, .. }) => {
                w = needed.max(w + 1);
                if w > render::MAX_WIDTH_PX {
                    return Some(w);
                }
            }
            _ => return (w != style.width_px).then_some(w),
        }
    }
    Some(w)
}

/// The figures of a run.
pub struct Figures {
    /// The map with the leaves' outlines and labels.
    pub overlay: render::MapFigure,
    /// The tree diagram as PNG, SVG and PDF; empty when there is no structure.
    pub tree_png: Vec<u8>,
    pub tree_svg: String,
    pub tree_pdf: Vec<u8>,
    /// The tree's leaves chosen for an id ([`FigureInput::label_choice`]), and how many of
    /// them are drawn without it (those a crowded diagram has no room for, see
    /// [`render::TreeFigure::ids_left_out`]).
    pub tree_leaves: usize,
    pub tree_ids_left_out: usize,
    /// The leaves [`FigureInput::label_choice`] chose for a label, of all the run's leaves
    /// (inside the frame or not).
    pub labels_chosen: (usize, usize),
}

/// Draws the overlay and the tree.
pub fn figures(input: &FigureInput, style: &Style) -> Result<Figures> {
    let map = input.map;
    // The top-level ancestor of each structure that has children (-1 for the others): the
    // branch outlines are traced from the run's label map through it, with no copy of the map.
    let branch_of: Option<Vec<i32>> = style.show_branches.then(|| {
        input
            .structures
            .iter()
            .map(|s| {
                let mut a = s.id;
                while let Some(p) = input.structures[a as usize].parent {
                    a = p;
                }
                if input.structures[a as usize].is_leaf {
                    -1
                } else {
                    a as i32
                }
            })
            .collect()
    });
    let n_leaves = input.structures.iter().filter(|s| s.is_leaf).count();
    if input.label_choice.needs_states()
        && n_leaves > 0
        && !input
            .structures
            .iter()
            .any(|s| s.is_leaf && s.state.as_deref().is_some_and(|w| w != "unknown"))
    {
        return Err(Error::usage(format!(
            "--labels chooses leaves by their gravitational state, but no leaf of this run has one ({}); give the run what the states need, or label the leaves another way, such as --labels 30.",
            unknown_reason(map, input.distance_pc)
        )));
    }
    if let LabelChoice::MassAtLeast(m) = input.label_choice
        && n_leaves > 0
        && !input
            .structures
            .iter()
            .any(|s| s.is_leaf && s.mass_msun.is_some())
    {
        return Err(Error::usage(format!(
            "--labels {m}Msun labels the leaves by mass, but this run has no masses ({}); give the run what masses need, or label the leaves another way, such as --labels bound or --labels 30.",
            no_mass_reason(map, input.distance_pc)
        )));
    }
    let leaves: Vec<LeafStyle> = leaf_labels(&input.structures, &input.label_choice, style.region)
        .into_iter()
        .map(|(s, label)| LeafStyle {
            id: s.id as i32,
            label,
            state: state_index(s.state.as_deref()),
            peak: (s.peak.0 as f64, s.peak.1 as f64),
        })
        .collect();
    // The criterion the known states come from: the virial parameter, alpha_BE, or both.
    let judged: Vec<bool> = input
        .structures
        .iter()
        .filter(|s| s.is_leaf && s.state.as_deref().is_some_and(|w| w != "unknown"))
        .map(|s| s.by_virial)
        .collect();
    let virial = if judged.iter().all(|&v| v) {
        Some(true)
    } else if judged.iter().all(|&v| !v) {
        Some(false)
    } else {
        None
    };
    let states: Vec<StateLegend> = STATES
        .iter()
        .map(|&(n, _)| StateLegend {
            name: n.to_string(),
            description: if n == "unknown" {
                unknown_reason(map, input.distance_pc)
            } else {
                state_words(n, virial)
            },
        })
        .collect();
    let labels_chosen = (
        leaves.iter().filter(|l| !l.label.is_empty()).count(),
        n_leaves,
    );
    // The tree names the leaves the map figure is asked to name.
    let with_id: std::collections::HashSet<i32> = leaves
        .iter()
        .filter(|l| !l.label.is_empty())
        .map(|l| l.id)
        .collect();
    let fsky = figure_sky(map, style.region);
    // Without a measurable pixel at the shown centre, the sky axes are still drawn (the
    // ticks find their own places), only the beam is not.
    let sky: Option<&dyn SkyAxes> = match &fsky {
        Some(f) => Some(f as &dyn SkyAxes),
        None => map.wcs.as_ref().map(|w| w as &dyn SkyAxes),
    };
    let beam = figure_beam(map, fsky.as_ref());
    let scale_bar = scale_bar(map, input.distance_pc, style.region);
    let overlay = render::Overlay {
        map: map.data.view(),
        unit_label: unit_label(map),
        // The label map as it is: the figure outlines only the listed leaves.
        labels: input.labels,
        branch_labels: branch_of.as_ref().map(|_| input.labels),
        branch_of: branch_of.as_deref(),
        leaves,
        states: states.clone(),
        sky,
        beam,
        scale_bar,
        title: input.title.clone(),
        name: Some(format!(
            "{}: leaves outlined",
            map.path.file_name().map_or_else(
                || map.path.display().to_string(),
                |f| f.to_string_lossy().into_owned()
            )
        )),
    };
    let nodes: Vec<TreeNode> = input
        .structures
        .iter()
        .map(|s| TreeNode {
            id: s.id,
            parent: s.parent,
            top: s.peak_value,
            bottom: s.merge_level,
            is_leaf: s.is_leaf,
            state: s.is_leaf.then(|| state_index(s.state.as_deref())),
            show_id: with_id.contains(&(s.id as i32)),
        })
        .collect();
    // The level axis names what the colour bar names (a map without a unit: "level").
    let level = Some(unit_label(map))
        .filter(|l| !l.is_empty())
        .unwrap_or_else(|| "level".into());
    // The map figure and the tree diagram are drawn at once.
    let (overlay, tree) = rayon::join(
        || render::render_map_figure(&overlay, style),
        || (!nodes.is_empty()).then(|| render::render_tree_figure(&nodes, &states, &level, style)),
    );
    let overlay = overlay.map_err(|e| Error::usage(format!("cannot draw the figure: {e}.")))?;
    let tree = tree
        .transpose()
        .map_err(|e| Error::usage(format!("cannot draw the tree of structures: {e}.")))?;
    Ok(match tree {
        Some(t) => Figures {
            overlay,
            tree_png: t.png,
            tree_svg: t.svg,
            tree_pdf: t.pdf,
            tree_leaves: t.leaves,
            tree_ids_left_out: t.ids_left_out,
            labels_chosen,
        },
        None => Figures {
            overlay,
            tree_png: Vec::new(),
            tree_svg: String::new(),
            tree_pdf: Vec::new(),
            tree_leaves: 0,
            tree_ids_left_out: 0,
            labels_chosen,
        },
    })
}

/// The number of pixels of the map of the run in `dir`, from its run record, if it can be
/// read (for sizing progress displays before the run itself is read).
pub fn run_pixels(dir: &Path) -> Option<usize> {
    let text = std::fs::read_to_string(dir.join("run.json")).ok()?;
    let run: serde_json::Value = serde_json::from_str(&text).ok()?;
    let n = |k: &str| run["map"][k].as_u64().map(|v| v as usize);
    Some(n("nx")? * n("ny")?)
}

/// A finished run read back from its folder (for `cairn draw`).
pub struct SavedRun {
    /// The map.
    pub map: Map,
    /// The label map.
    pub labels: Array2<i32>,
    /// The structures.
    pub structures: Vec<FigStructure>,
    /// Distance in pc.
    pub distance_pc: Option<f64>,
}

/// What identifies a run in its record, with the words that name it: the input map (its
/// SHA-256, HDU and plane), the thresholds and options, the physical assumptions, the beam and
/// the common resolution. Timings, threads and the command line differ between two runs that
/// are otherwise the same run.
const RUN_IDENTITY: [(&[&str], &str); 7] = [
    (&["input", "sha256"], "input SHA-256"),
    (&["input", "hdu"], "input HDU"),
    (&["input", "plane"], "input plane"),
    (&["parameters"], "thresholds and options"),
    (&["physics"], "physical assumptions"),
    (&["beam"], "beam"),
    (&["common_resolution"], "common resolution"),
];

/// Refuses to draw the run in `run_dir` into `out_dir` when `out_dir` holds the record
/// (`run.json`) of another run: the figures would sit beside (or, with `--force`, replace)
/// that run's own and no longer match its catalogue. The run's own folder, a copy of it, and a
/// folder without a run record are allowed; so is any folder when the run's own record cannot
/// be read (reading the run then says why).
pub fn check_output_folder(run_dir: &Path, out_dir: &Path) -> Result<()> {
    let name = crate::segment::names::RUN;
    let there = out_dir.join(name);
    if !there.exists() {
        return Ok(());
    }
    let same_folder = match (run_dir.canonicalize(), out_dir.canonicalize()) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    };
    if same_folder {
        return Ok(());
    }
    let record = |p: &Path| -> Option<serde_json::Value> {
        serde_json::from_str(&std::fs::read_to_string(p).ok()?).ok()
    };
    let differs = match (record(&run_dir.join(name)), record(&there)) {
        (None, _) => None,
        (Some(a), Some(b)) => RUN_IDENTITY.iter().find_map(|(keys, what)| {
            let get = |v: &serde_json::Value| {
                keys.iter()
                    .try_fold(v, |v, k| v.get(*k))
                    .cloned()
                    .unwrap_or(serde_json::Value::Null)
            };
            (get(&a) != get(&b)).then(|| {
                format!(
                    "differs from {} in its {what}",
                    run_dir.join(name).display()
                )
            })
        }),
        (Some(_), None) => Some("cannot be read as a run record".to_string()),
    };
    let Some(differs) = differs else {
        return Ok(());
    };
    Err(Error::output(
        out_dir,
        format!(
            "holds another run (its {name} {differs}), and this run's figures there would not match that run's catalogue; give -o a folder of its own, or draw that run with cairn draw {}.",
            out_dir.display()
        ),
    ))
}

/// Reads a run folder: run.json, labels.fits, hierarchy.json and structures.csv; the map from
/// `map_override` or the path recorded in run.json.
pub fn read_run(dir: &Path, map_override: Option<&Path>) -> Result<SavedRun> {
    if !dir.exists() {
        return Err(Error::input(
            dir,
            "no such folder; give the folder of a finished `cairn segment` run.",
        ));
    }
    if !dir.is_dir() {
        // The first card only: the file may be a map of gigabytes.
        let starts_fits = || -> bool {
            use std::io::Read as _;
            let mut head = [0u8; 9];
            std::fs::File::open(dir)
                .and_then(|mut f| f.read_exact(&mut head))
                .is_ok_and(|_| &head == b"SIMPLE  =")
        };
        let what = if starts_fits() {
            "is a FITS file, not a run folder"
        } else {
            "is a file, not a run folder"
        };
        return Err(Error::input(
            dir,
            format!(
                "{what}; give the folder cairn segment wrote (cairn segment MAP -o FOLDER makes one)."
            ),
        ));
    }
    let read = |name: &str| -> Result<String> {
        let p = dir.join(name);
        std::fs::read_to_string(&p).map_err(|_| {
            Error::input(
                &p,
                "is missing or unreadable; give the folder of a finished `cairn segment` run.",
            )
        })
    };
    let run: serde_json::Value = serde_json::from_str(&read("run.json")?).map_err(|e| {
        Error::input(
            &dir.join("run.json"),
            format!("is not a run record ({e}); run cairn segment again to remake the run."),
        )
    })?;
    let map_path: PathBuf = match map_override {
        Some(p) => p.to_path_buf(),
        None => crate::segment::recorded_input(&run["input"]),
    };
    if map_path.as_os_str().is_empty() {
        return Err(Error::input(
            &dir.join("run.json"),
            format!(
                "records no input map, so it is not a whole run record; give the map with --map, or {REMAKE}."
            ),
        ));
    }
    let mut opts = LoadOptions {
        require_unit: false,
        ..LoadOptions::default()
    };
    // The HDU and plane the run read: a record that holds something else there than a
    // whole number (or null for no plane) was edited, and a guess could draw another image.
    for key in ["hdu", "plane"] {
        let v = &run["input"][key];
        if !(v.is_null() || v.is_u64()) {
            return Err(Error::input(
                &dir.join("run.json"),
                format!(
                    "records the input's {key} as {v}, which is not a zero-based index, so the file was changed; {REMAKE}."
                ),
            ));
        }
    }
    if let Some(h) = run["input"]["hdu"].as_u64() {
        opts.hdu = map::HduChoice::Index(h as usize);
    }
    opts.plane = run["input"]["plane"].as_u64().map(|p| p as usize);
    // The value the run read as missing (`--missing-value`).
    let mv = &run["input"]["missing_value"];
    if !mv.is_null() {
        match mv.as_f64().filter(|v| (*v as f32).is_finite()) {
            Some(v) => opts.missing_value = Some(v as f32),
            None => {
                return Err(Error::input(
                    &dir.join("run.json"),
                    format!(
                        "records the input's missing value as {mv}, which is not a number, so the file was changed; {REMAKE}."
                    ),
                ));
            }
        }
    }
    // The unit as the run read it; a unit without conversion is named as such, as `--unit`
    // takes it (the header's own unit is then no question).
    // The extinction band the run read (from the option or the unit), which the unit's text
    // alone may not say.
    if run["map"]["unit_kind"].as_str()
        == Some(
            PixelUnit::Extinction {
                band: units::ExtinctionBand::K,
            }
            .kind_name(),
        )
    {
        opts.band = units::ExtinctionBand::K;
    }
    if let Some(u) = run["map"]["unit"].as_str() {
        if run["map"]["unit_kind"].as_str() == Some(PixelUnit::Other.kind_name()) {
            opts.unit = Some(format!("other:{u}"));
        } else if !u.is_empty() {
            opts.unit = Some(u.to_string());
        }
    }
    // A run on the map smoothed to a common resolution: the file's own beam, then the same
    // smoothing again below.
    let common = run["common_resolution"].as_object().and_then(|c| {
        let g = |k: &str| c.get(k).and_then(|v| v.as_f64());
        Some((g("resolution_m")?, g("distance_m")?))
    });
    let beam_record = if common.is_some() {
        &run["common_resolution"]["input_beam"]
    } else {
        &run["beam"]
    };
    if let Some(b) = beam_record.as_object() {
        let g = |k: &str| b.get(k).and_then(|v| v.as_f64());
        if let (Some(a), Some(m), Some(p)) = (g("major_deg"), g("minor_deg"), g("pa_deg")) {
            // A beam a map can have (the file was edited otherwise).
            if !(a.is_finite() && m.is_finite() && 0.0 < m && m <= a) {
                return Err(Error::input(
                    &dir.join("run.json"),
                    format!(
                        "records a beam of {a} x {m} degrees, which no map has, so the file was changed; {REMAKE}."
                    ),
                ));
            }
            opts.beam = Some(map::Beam {
                major_deg: a,
                minor_deg: m,
                pa_deg: p,
            });
        }
    }
    let map = map::load(&map_path, &opts).map_err(|e| {
        let prefix = format!("{}: ", map_path.display());
        let why = e.message.trim_end_matches('.');
        let why = why.strip_prefix(prefix.as_str()).unwrap_or(why);
        Error::input(
            &map_path,
            if map_override.is_some() {
                format!("cannot be read as the run's map ({why}); give the FITS map the run was made from with --map.")
            } else {
                format!("the run's map cannot be read ({why}); give it with --map.")
            },
        )
    })?;
    let recorded = run["input"]["sha256"].as_str().unwrap_or("");
    let now = crate::segment::sha256_file(&map_path)?;
    if !recorded.is_empty() && recorded != now {
        return Err(Error::input(
            &map_path,
            "is not the map this run was made from (its SHA-256 differs); give the right one with --map.",
        ));
    }
    let map = match common {
        Some((resolution_m, distance_m)) => {
            crate::resolution::to_common_resolution(&map, resolution_m, distance_m)?
        }
        None => map,
    };
    // The map as the run segmented it (after any smoothing and regridding) has the size the
    // record gives.
    if let (Some(nx), Some(ny)) = (run["map"]["nx"].as_u64(), run["map"]["ny"].as_u64())
        && (nx as usize, ny as usize) != (map.nx(), map.ny())
    {
        return Err(Error::input(
            &dir.join("run.json"),
            format!(
                "records a map of {nx} x {ny} pixels, but the run's map read as the run read it is {} x {}, so the file was changed; {REMAKE}.",
                map.nx(),
                map.ny()
            ),
        ));
    }
    let lab_path = dir.join(crate::segment::names::LABELS);
    let labels = map::load(
        &lab_path,
        &LoadOptions {
            require_unit: false,
            ..LoadOptions::default()
        },
    )
    .map_err(|e| {
        Error::input(
            &lab_path,
            format!(
                "the run's label map cannot be read ({}); run cairn segment again to remake the run.",
                e.message.trim_end_matches('.')
            ),
        )
    })?;
    // cairn writes 32-bit integer labels; other data were written by something else.
    if labels.bitpix != 32 {
        return Err(Error::input(
            &lab_path,
            format!(
                "holds BITPIX = {} data, not the 32-bit integer labels cairn writes, so the file was replaced; {REMAKE}.",
                labels.bitpix
            ),
        ));
    }
    let labels = labels
        .data
        .mapv(|v| if v.is_finite() { v as i32 } else { -1 });
    if labels.dim() != map.data.dim() {
        return Err(Error::input(
            &lab_path,
            "does not have the map's shape, so the run folder mixes two runs; run cairn segment again.",
        ));
    }
    let tree: serde_json::Value = serde_json::from_str(&read(crate::segment::names::TREE_JSON)?)
        .map_err(|e| {
            Error::input(
                &dir.join(crate::segment::names::TREE_JSON),
                format!(
                    "is not a hierarchy file ({e}); run cairn segment again to remake the run."
                ),
            )
        })?;
    let tree_path = dir.join(crate::segment::names::TREE_JSON);
    let csv_path = dir.join(crate::segment::names::CSV);
    let mut structures = Vec::new();
    for (k, s) in tree["structures"]
        .as_array()
        .map(Vec::as_slice)
        .unwrap_or_default()
        .iter()
        .enumerate()
    {
        let id = s["id"].as_u64();
        let parent = s["parent"].as_u64();
        // The engine numbers structures 0, 1, 2, ... with every parent before its children
        // (figures index structures by id and follow parents up to the roots).
        if id != Some(k as u64) || parent.is_some_and(|p| p >= k as u64) {
            return Err(Error::input(
                &tree_path,
                format!(
                    "structure number {} has the id {} and the parent {}, but cairn numbers structures 0, 1, 2, ... with each parent before its children, so the file was changed; {REMAKE}.",
                    k + 1,
                    s["id"],
                    s["parent"]
                ),
            ));
        }
        let peak = (
            s["peak_x"].as_u64().unwrap_or(u64::MAX) as usize,
            s["peak_y"].as_u64().unwrap_or(u64::MAX) as usize,
        );
        if peak.0 >= map.nx() || peak.1 >= map.ny() {
            return Err(Error::input(
                &tree_path,
                format!(
                    "structure {k} has its peak at pixel ({}, {}), outside the {} x {} map, so the file belongs to another run; {REMAKE}.",
                    s["peak_x"],
                    s["peak_y"],
                    map.nx(),
                    map.ny()
                ),
            ));
        }
        let (peak_value, merge_level) = (
            s["peak"].as_f64().unwrap_or(f64::NAN),
            s["merge_level"].as_f64().unwrap_or(f64::NAN),
        );
        if !(peak_value.is_finite() && merge_level.is_finite() && merge_level <= peak_value) {
            return Err(Error::input(
                &tree_path,
                format!(
                    "structure {k} has the peak {} and the merge level {}, which no structure has (both numbers, the peak the higher), so the file was changed; {REMAKE}.",
                    s["peak"], s["merge_level"]
                ),
            ));
        }
        structures.push(FigStructure {
            id: k as u32,
            parent: parent.map(|p| p as u32),
            is_leaf: s["children"]
                .as_array()
                .map(|c| c.is_empty())
                .unwrap_or(true),
            peak,
            peak_value,
            merge_level,
            state: None,
            by_virial: false,
            mass_msun: None,
        });
    }
    let leaves_only = run["parameters"]["leaves_only"].as_bool().unwrap_or(false);
    let states = read_states(&csv_path, &read(crate::segment::names::CSV)?)?;
    check_catalogue_ids(&csv_path, &states, &structures, leaves_only)?;
    for row in states {
        let s = &mut structures[row.id as usize];
        s.state = row.state;
        s.by_virial = row.by_virial;
        s.mass_msun = row.mass_msun;
    }
    check_labels(&lab_path, labels.view(), &structures)?;
    Ok(SavedRun {
        map,
        labels,
        structures,
        distance_pc: run["physics"]["distance_pc"].as_f64(),
    })
}

/// The fix named when the files of a run folder do not belong together.
const REMAKE: &str = "re-run `cairn segment` on the map with --force to remake the run";

/// What the figures read of one catalogue row.
struct CatalogueRow {
    id: u32,
    /// The `state` column's word (None without the column).
    state: Option<String>,
    /// Whether the row has a finite `alpha_vir`.
    by_virial: bool,
    /// The `mass` column (M_sun), when finite.
    mass_msun: Option<f64>,
}

/// The ids of a catalogue's rows, in order, each with its `state` (None when the catalogue has
/// no `state` column, as without a distance). A damaged catalogue (rows cut short, ids that
/// are not numbers, no `id` column) and states that are none of the words of [`STATES`] are
/// refused.
fn read_states(path: &Path, csv: &str) -> Result<Vec<CatalogueRow>> {
    let (cols, rows) = crate::table::read_catalogue_csv(path, csv)?;
    let Some(i) = cols.iter().position(|c| c == "id") else {
        return Err(Error::input(
            path,
            format!(
                "has no id column, so it is not a catalogue written by cairn segment; {REMAKE}."
            ),
        ));
    };
    let s = cols.iter().position(|c| c == "state");
    // A virial parameter in the row: the state comes from it.
    let v = cols.iter().position(|c| c == "alpha_vir");
    let m = cols.iter().position(|c| c == "mass");
    rows.iter()
        .enumerate()
        .map(|(n, r)| {
            let id = r[i].parse::<u32>().map_err(|_| {
                Error::input(
                    path,
                    format!(
                        "row {} has the id '{}': the catalogue is damaged; {REMAKE}.",
                        n + 1,
                        r[i]
                    ),
                )
            })?;
            let state = s.map(|s| r[s].clone());
            if let Some(st) = &state
                && !STATES.iter().any(|(name, _)| name == st)
            {
                return Err(Error::input(
                    path,
                    format!(
                        "row {} (structure {id}) has the state '{st}', which is none of bound, marginal, unbound or unknown, so the catalogue was changed; {REMAKE}.",
                        n + 1
                    ),
                ));
            }
            let by_virial = v.is_some_and(|v| r[v].parse::<f64>().is_ok_and(f64::is_finite));
            let mass_msun = m
                .and_then(|m| r[m].parse::<f64>().ok())
                .filter(|x| x.is_finite());
            Ok(CatalogueRow {
                id,
                state,
                by_virial,
                mass_msun,
            })
        })
        .collect()
}

/// Refuses a catalogue whose ids are not those of the hierarchy file (its leaves', for a run
/// made with `--leaves-only`), each once; the order of the rows does not matter.
fn check_catalogue_ids(
    path: &Path,
    rows: &[CatalogueRow],
    structures: &[FigStructure],
    leaves_only: bool,
) -> Result<()> {
    let tree = crate::segment::names::TREE_JSON;
    let expected = |id: u32| {
        structures
            .get(id as usize)
            .is_some_and(|s| s.is_leaf || !leaves_only)
    };
    let mut seen = vec![false; structures.len()];
    for &CatalogueRow { id, .. } in rows {
        if !expected(id) {
            let what = if leaves_only && (id as usize) < structures.len() {
                format!("{tree} has it as a branch but the run catalogued leaves only")
            } else {
                format!("{tree} has no structure {id}")
            };
            return Err(Error::input(
                path,
                format!(
                    "has a row for structure {id} but {what}, so the two files come from different runs; {REMAKE}."
                ),
            ));
        }
        if std::mem::replace(&mut seen[id as usize], true) {
            return Err(Error::input(
                path,
                format!("has two rows for structure {id}, so the catalogue was changed; {REMAKE}."),
            ));
        }
    }
    if let Some(id) = (0..structures.len() as u32).find(|&id| expected(id) && !seen[id as usize]) {
        return Err(Error::input(
            path,
            format!(
                "has no row for structure {id} of {tree} ({} rows for {} structures): rows were deleted or the two files come from different runs; {REMAKE}.",
                rows.len(),
                (0..structures.len() as u32)
                    .filter(|&i| expected(i))
                    .count()
            ),
        ));
    }
    Ok(())
}

/// Refuses a label map that holds a label which is no structure of the hierarchy file, or
/// that does not give a leaf's peak pixel the leaf's id (the smallest structure there).
fn check_labels(path: &Path, labels: ArrayView2<i32>, structures: &[FigStructure]) -> Result<()> {
    let n = structures.len() as i64;
    let tree = crate::segment::names::TREE_JSON;
    if let Some(((y, x), &v)) = labels
        .indexed_iter()
        .find(|&(_, &v)| v < -1 || v as i64 >= n)
    {
        let ids = if n > 0 {
            format!("ids 0 to {}", n - 1)
        } else {
            "no structure".to_string()
        };
        return Err(Error::input(
            path,
            format!(
                "gives pixel ({x}, {y}) the label {v}, but {tree} has {ids}, so the label map belongs to another run; {REMAKE}."
            ),
        ));
    }
    for s in structures.iter().filter(|s| s.is_leaf) {
        let v = labels[[s.peak.1, s.peak.0]];
        if v != s.id as i32 {
            return Err(Error::input(
                path,
                format!(
                    "gives the peak pixel ({}, {}) of leaf {} of {tree} the label {v}, so the label map belongs to another run; {REMAKE}.",
                    s.peak.0, s.peak.1, s.id
                ),
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An emission map's quantity takes its band as an index: micrometres below a millimetre,
    /// millimetres from it, at most four significant digits; ν when no wavelength is known.
    #[test]
    fn bands_are_named_by_wavelength() {
        assert_eq!(band_name(Some(850e-6)), "850 µm");
        assert_eq!(band_name(Some(250e-6)), "250 µm");
        assert_eq!(band_name(Some(299_792_458.0 / 352.7e9)), "850 µm");
        assert_eq!(band_name(Some(1.3e-3)), "1.3 mm");
        assert_eq!(band_name(Some(70e-6)), "70 µm");
        assert_eq!(band_name(None), "ν");
    }

    /// `--labels` reads its five forms, states in any case and order once each, and refuses
    /// other words, fractions of a leaf and negative masses.
    #[test]
    fn label_choices_are_read() {
        let p = |t: &str| LabelChoice::parse(t);
        assert_eq!(p("all").unwrap(), LabelChoice::All);
        assert_eq!(p("NONE").unwrap(), LabelChoice::None);
        assert_eq!(
            p("unbound, Bound,bound").unwrap(),
            LabelChoice::States(vec![0, 2])
        );
        assert_eq!(p("12").unwrap(), LabelChoice::Brightest(12));
        assert_eq!(p("2.5Msun").unwrap(), LabelChoice::MassAtLeast(2.5));
        // Every digit of a mass copied from a catalogue.
        assert_eq!(
            p("1.2345678901234567Msun").unwrap(),
            LabelChoice::MassAtLeast(1.2345678901234567)
        );
        // Other mass units through the solar mass cairn uses (astropy's, 1.988409870698051e30 kg).
        assert_eq!(
            p("1.988409870698051e30kg").unwrap(),
            LabelChoice::MassAtLeast(1.0)
        );
        for bad in ["bright", "bound,hot", "0.5", "1pc", "-1Msun", ""] {
            assert!(p(bad).is_err(), "{bad}");
        }
    }

    /// Labels go to the chosen leaves, highest peak first (equal peaks by id); branches get
    /// none.
    #[test]
    fn leaf_labels_follow_the_choice_highest_peak_first() {
        let s = |id: u32, is_leaf: bool, peak: f64, state: &str, mass: Option<f64>| FigStructure {
            id,
            parent: None,
            is_leaf,
            peak: (id as usize, 0),
            peak_value: peak,
            merge_level: 0.0,
            state: Some(state.into()),
            by_virial: false,
            mass_msun: mass,
        };
        let v = vec![
            s(0, false, 9.0, "bound", Some(50.0)),
            s(1, true, 2.0, "bound", Some(3.0)),
            s(2, true, 5.0, "unbound", None),
            s(3, true, 2.0, "marginal", Some(0.5)),
            s(4, true, 7.0, "bound", Some(1.0)),
        ];
        let got = |c: LabelChoice| -> Vec<(u32, String)> {
            leaf_labels(&v, &c, None)
                .into_iter()
                .map(|(s, l)| (s.id, l))
                .collect()
        };
        let order: Vec<u32> = got(LabelChoice::All).iter().map(|l| l.0).collect();
        assert_eq!(order, vec![4, 2, 1, 3]);
        let named = |c: LabelChoice| -> Vec<u32> {
            got(c)
                .into_iter()
                .filter(|l| !l.1.is_empty())
                .map(|l| l.0)
                .collect()
        };
        assert_eq!(named(LabelChoice::All), vec![4, 2, 1, 3]);
        assert!(named(LabelChoice::None).is_empty());
        assert_eq!(named(LabelChoice::States(vec![0])), vec![4, 1]);
        assert_eq!(named(LabelChoice::Brightest(2)), vec![4, 2]);
        assert_eq!(named(LabelChoice::Brightest(3)), vec![4, 2, 1]);
        assert_eq!(named(LabelChoice::MassAtLeast(1.0)), vec![4, 1]);
        assert_eq!(got(LabelChoice::All)[0].1, "4");
        // In a region without leaf 4 (peaks at x = id), the highest peak shown is leaf 2's.
        let in_region: Vec<u32> = leaf_labels(&v, &LabelChoice::Brightest(1), Some((0, 0, 4, 1)))
            .into_iter()
            .filter(|l| !l.1.is_empty())
            .map(|l| l.0.id)
            .collect();
        assert_eq!(in_region, vec![2]);
    }

    #[test]
    fn scale_bars_are_round_and_about_a_fifth() {
        assert_eq!(scale_bar_length(2.6), 0.5);
        assert_eq!(scale_bar_length(0.6), 0.1);
        assert_eq!(scale_bar_length(12.0), 2.0);
    }

    /// FITS units write negative powers as `-2` after the unit (FITS 4.0 section 4.3.2);
    /// only those are raised, so `H2` in a name keeps its digit on the line.
    #[test]
    fn unit_powers_are_raised() {
        assert_eq!(unit_markup("cm-2"), "cm^-2");
        assert_eq!(unit_markup("K km s-1"), "K km s^-1");
        assert_eq!(unit_markup("MJy/sr"), "MJy/sr");
        assert_eq!(unit_markup("N(H2) 1e-3"), "N(H2) 1e-3");
    }

    /// An invented `nx` x `ny` map of 6" pixels centred at (lon, lat) of the frame given by
    /// `ctypes` and `extra` cards, written to `dir` and loaded.
    fn region_map(
        dir: &Path,
        ctypes: (&str, &str),
        (lon, lat): (f64, f64),
        extra: &[(&str, crate::header::Value)],
        (nx, ny): (usize, usize),
    ) -> Map {
        use crate::header::{Header, Value};
        let mut h = Header::new();
        let mut cards = vec![
            ("CTYPE1", Value::Str(ctypes.0.into())),
            ("CTYPE2", Value::Str(ctypes.1.into())),
            ("CRPIX1", Value::Float(nx as f64 / 2.0 + 0.5)),
            ("CRPIX2", Value::Float(ny as f64 / 2.0 + 0.5)),
            ("CRVAL1", Value::Float(lon)),
            ("CRVAL2", Value::Float(lat)),
            ("CDELT1", Value::Float(-6.0 / 3600.0)),
            ("CDELT2", Value::Float(6.0 / 3600.0)),
            ("BUNIT", Value::Str("Jy/beam".into())),
        ];
        cards.extend(extra.iter().cloned());
        for (k, v) in cards {
            h.set(k, v, "");
        }
        let p = dir.join(format!("{lon}_{lat}_{}_{}.fits", ctypes.0, extra.len()));
        let data = Array2::from_elem((ny, nx), 1.0f32);
        crate::fits_write::write_image_f32(&p, data.view(), &h, false).unwrap();
        map::load(&p, &Default::default()).unwrap()
    }

    fn equatorial(dir: &Path, lon: f64, lat: f64) -> Map {
        region_map(dir, ("RA---TAN", "DEC--TAN"), (lon, lat), &[], (200, 100))
    }

    fn refusal(text: &str, map: &Map) -> String {
        match region_asked(text, map) {
            Err(e) => e.to_string(),
            Ok(r) => panic!("{text} was read as {r:?}"),
        }
    }

    /// Sizes suggested in refusals: three significant digits in the unit that keeps them
    /// below 120 (by hand).
    #[test]
    fn suggested_sizes_are_readable() {
        assert_eq!(angle_size_text(180.0 / 3600.0), "3arcmin");
        assert_eq!(angle_size_text(119.99 / 3600.0), "2arcmin");
        assert_eq!(angle_size_text(41.99999 / 3600.0), "42arcsec");
        assert_eq!(angle_size_text(0.5 / 3600.0), "0.5arcsec");
        assert_eq!(angle_size_text(12.345 / 60.0), "12.3arcmin");
        assert_eq!(angle_size_text(2.5), "2.5deg");
    }

    /// A pixel centre (a size in px or a plain number) must lie on the map, inside its outer
    /// pixel edges; off the map, when its two numbers in degrees are a sky position on the
    /// map, the refusal says the centre was read as pixels because of the size's unit and
    /// gives the angular size of the same number of pixels there (30 pixels of 6" are 3',
    /// 7 are 42": common practice, the arithmetic by hand).
    #[test]
    fn a_pixel_centre_lies_on_the_map() {
        let dir = tempfile::tempdir().unwrap();
        let m = equatorial(dir.path(), 120.0, -30.0);
        for ok in ["0,0,20px", "199,99,20px", "-0.4,99.4,20", "100,50,30px"] {
            let r = region_asked(ok, &m).unwrap();
            assert_eq!(r.note, None, "{ok}");
        }
        let r = region_asked("100,50,30px", &m).unwrap();
        assert_eq!((r.centre, r.size), ((100.0, 50.0), (30.0, 30.0)));
        let e = refusal("120.01,-30.005,30px", &m);
        assert!(
            e.contains("has its centre read as pixels because its size is in px")
                && e.contains("for a sky centre in degrees give an angular size, such as 120.01,-30.005,3arcmin (what 30px spans there)"),
            "{e}"
        );
        let e = refusal("120.01,-30.005,7", &m);
        assert!(
            e.contains("because its size is a plain number, read as pixels")
                && e.contains("such as 120.01,-30.005,42arcsec"),
            "{e}"
        );
        // Off the map with no sky position there either: where the map's pixels run.
        for bad in [
            "250,50,20px",
            "-0.6,50,20px",
            "100,99.6,20px",
            "10,-30,20px",
        ] {
            let e = refusal(bad, &m);
            assert!(
                e.contains("off the map, whose pixels run x 0 to 199 and y 0 to 99 (zero-based)"),
                "{bad}: {e}"
            );
        }
        // Without a WCS, the same rule.
        let e = refusal("250,50,20px", &m_without_wcs(dir.path()));
        assert!(e.contains("off the map"), "{e}");
    }

    fn m_without_wcs(dir: &Path) -> Map {
        use crate::header::{Header, Value};
        let mut h = Header::new();
        h.set("BUNIT", Value::Str("Jy/beam".into()), "");
        let p = dir.join("nowcs.fits");
        let data = Array2::from_elem((100, 200), 1.0f32);
        crate::fits_write::write_image_f32(&p, data.view(), &h, false).unwrap();
        map::load(&p, &Default::default()).unwrap()
    }

    /// A pixel centre on the map whose numbers are also, in degrees, a sky position on it is
    /// drawn as pixels, with a note saying how to ask for the sky position instead; the note
    /// comes before the one on a region reaching past the edge.
    #[test]
    fn a_pixel_centre_that_is_also_on_the_sky_is_said() {
        let dir = tempfile::tempdir().unwrap();
        let m = equatorial(dir.path(), 50.0, 30.0);
        let r = region_asked("50.01,30.01,20px", &m).unwrap();
        assert_eq!(r.centre, (50.01, 30.01));
        let note = r.note.expect("a note");
        assert!(
            note.contains("is read as a pixel centre because its size is in px")
                && note.ends_with("such as 50.01,30.01,2arcmin"),
            "{note}"
        );
        let (_, notes) = parse_region("50.01,30.01,80px", &m).unwrap();
        let notes = notes.unwrap();
        let lines: Vec<&str> = notes.lines().collect();
        assert_eq!(lines.len(), 2, "{notes}");
        assert!(lines[0].contains("also a sky position") && lines[1].contains("reaches past"));
        assert_eq!(region_asked("120,60,20px", &m).unwrap().note, None);
    }

    /// A sky centre off the map is refused with the map's frame and, where one exists, the way
    /// to give the same numbers that lands on the map: in the other frame (galactic on an
    /// equatorial map, ICRS on a galactic one, numbers from cairn's own conversion, checked
    /// against astropy in tests/wcs_astropy.rs), in the map's own frame when another was
    /// named, or as pixels with a size in pixels (5' of 6" pixels is 50: by hand).
    #[test]
    fn a_sky_centre_off_the_map_says_how_to_give_it() {
        let dir = tempfile::tempdir().unwrap();
        let m = equatorial(dir.path(), 120.0, -30.0);
        let (l, b) =
            crate::wcs::convert_frame(120.0, -30.0, &SkyFrame::Icrs, &SkyFrame::Galactic).unwrap();
        let e = refusal(&format!("{l},{b},2arcmin"), &m);
        assert!(
            e.contains(
                "a sky centre is read in degrees in the map's own frame (equatorial RA,Dec)"
            ) && e.contains(&format!(
                "as galactic coordinates these fall on the map: give galactic:{l},{b},2arcmin"
            )),
            "{e}"
        );
        let r = region_asked(&format!("galactic:{l},{b},2arcmin"), &m).unwrap();
        assert!((r.centre.0 - 99.5).abs() < 1e-6 && (r.centre.1 - 49.5).abs() < 1e-6);
        let e = refusal("galactic:120.01,-30.005,2arcmin", &m);
        assert!(
            e.contains("(galactic) is ")
                && e.contains("in the map's frame (ICRS) and is outside the map's projection")
                && e.contains("without the frame, in the map's own (ICRS), these fall on the map: give 120.01,-30.005,2arcmin"),
            "{e}"
        );
        let e = refusal("100,50,5arcmin", &m);
        assert!(
            e.contains("a pixel centre needs a size in pixels, such as 100,50,50px"),
            "{e}"
        );
        let e = refusal("45,-1.5,2arcmin", &m);
        assert!(
            e.contains(
                "unless another is named first (icrs:, fk5: or galactic:, such as galactic:LON,LAT,SIZE)"
            ),
            "{e}"
        );
        // On a galactic map the other frame is ICRS, in hours or degrees.
        let g = region_map(
            dir.path(),
            ("GLON-TAN", "GLAT-TAN"),
            (l, b),
            &[],
            (200, 100),
        );
        let e = refusal("08:00:02.4,-30.005,2arcmin", &g);
        assert!(
            e.contains("read as hours of right ascension, but the centre is in the galactic frame"),
            "{e}"
        );
        let e = refusal("120.01,-30.005,2arcmin", &g);
        assert!(
            e.contains("(galactic l,b)")
                && e.contains(
                    "as ICRS coordinates these fall on the map: give icrs:120.01,-30.005,2arcmin"
                ),
            "{e}"
        );
        assert!(region_asked("icrs:08:00:02.4,-30:00:18,2arcmin", &g).is_ok());
    }

    /// A frame named first is one of icrs, fk5 and galactic (gal), in any case; any other
    /// word is refused, as is a conversion cairn does not make (into FK4) and a size in pixels
    /// with a named frame.
    #[test]
    fn region_frames_are_named_or_refused() {
        let dir = tempfile::tempdir().unwrap();
        let m = equatorial(dir.path(), 120.0, -30.0);
        let (l, b) =
            crate::wcs::convert_frame(120.0, -30.0, &SkyFrame::Icrs, &SkyFrame::Galactic).unwrap();
        let at = |t: &str| region_asked(t, &m).unwrap().centre;
        let gal = at(&format!("galactic:{l},{b},2arcmin"));
        assert_eq!(at(&format!("GAL:{l},{b},2arcmin")), gal);
        assert_eq!(at(&format!(" Galactic :{l},{b},2arcmin")), gal);
        // The map's own frame named: the same as without it.
        assert_eq!(
            at("icrs:120.01,-30.005,2arcmin"),
            at("120.01,-30.005,2arcmin")
        );
        // FK5 J2000 differs from ICRS by tens of milliarcseconds (the frame bias).
        let (fx, _) = at("fk5:120.01,-30.005,2arcmin");
        let (ix, _) = at("120.01,-30.005,2arcmin");
        assert!(
            (fx - ix).abs() > 1e-4 && (fx - ix).abs() < 0.05,
            "{fx} {ix}"
        );
        let e = refusal("hcrs:120.01,-30.005,2arcmin", &m);
        assert!(
            e.contains(
                "names a frame 'hcrs' that is not understood: give icrs, fk5 (J2000) or galactic"
            ),
            "{e}"
        );
        let e = refusal("icrs:120.01,-30.005,30px", &m);
        assert!(
            e.contains("has a sky centre, so its size is an angle"),
            "{e}"
        );
        let fk4 = region_map(
            dir.path(),
            ("RA---TAN", "DEC--TAN"),
            (120.0, -30.0),
            &[("RADESYS", crate::header::Value::Str("FK4".into()))],
            (200, 100),
        );
        let e = refusal("icrs:120.01,-30.005,2arcmin", &fk4);
        assert!(
            e.contains("gives its centre in ICRS, which cairn does not convert to the map's frame (FK4 B1950)"),
            "{e}"
        );
        assert!(region_asked("120.01,-30.005,2arcmin", &fk4).is_ok());
        let e = refusal("icrs:120.01,-30.005,2arcmin", &m_without_wcs(dir.path()));
        assert!(e.contains("needs a map with a celestial WCS"), "{e}");
    }

    /// Colon sexagesimal centres read as the letter forms: hours for a right ascension and
    /// degrees for a latitude, placing the region at the same pixel as the degrees.
    #[test]
    fn colon_centres_equal_their_degrees() {
        let dir = tempfile::tempdir().unwrap();
        let m = equatorial(dir.path(), 120.0, -30.0);
        // 120.01 deg = 8h00m02.4s; -30.005 deg = -30d00m18s (15 degrees per hour); the two
        // differ by the rounding of their sums, about 1e-14 degree.
        let deg = region_asked("120.01,-30.005,2arcmin", &m).unwrap();
        for t in [
            "08:00:02.4,-30:00:18,2arcmin",
            "8h00m02.4s,-30d00m18s,2arcmin",
            "08:00:02.4,-30d00m18s,2arcmin",
        ] {
            let r = region_asked(t, &m).unwrap();
            assert!(
                (r.centre.0 - deg.centre.0).abs() < 1e-6
                    && (r.centre.1 - deg.centre.1).abs() < 1e-6
                    && (r.size.0 - deg.size.0).abs() < 1e-6
                    && (r.size.1 - deg.size.1).abs() < 1e-6,
                "{t}: {r:?} against {deg:?}"
            );
        }
    }
}

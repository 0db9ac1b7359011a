//! Figures for a paper: a map with the outlines of its leaves, and the tree of structures.
//!
//! Owns everything drawn: the map image (stretch, limits, colour map, area-averaged to the
//! figure's resolution), leaf outlines traced exactly along pixel boundaries
//! ([`outline::trace_outlines`]), leaf labels placed so they do not overlap (beside each
//! leaf, or farther out on a leader line where leaves crowd; the few that find no room are
//! counted in [`MapFigure`] rather than drawn over others), sky or pixel
//! axes with ticks where coordinate lines cross the frame ([`axes::axis_ticks`]), the beam,
//! the scale bar, the colour bar, the legend of states, and the tree diagram.
//!
//! Inputs are plain data ([`Overlay`], [`TreeNode`], [`Style`]) so this module needs nothing
//! from the rest of cairn; sky coordinates come through the [`SkyAxes`] trait. Every figure is
//! built once as a list of primitives and written as PNG (anti-aliased with `tiny-skia`), as
//! SVG (vector outlines, the map as an embedded PNG, text as glyph outlines of the bundled
//! DejaVu Sans font) and as PDF (the same vector outlines and image on one page of the print
//! size, `pdf.rs`), so the outputs agree and are byte-identical from run to run and machine to
//! machine.
//!
//! Colours of states follow the palette of Okabe & Ito (2008, "Color Universal Design",
//! chosen to stay distinguishable for the common forms of colour-vision deficiency), and each
//! state also has its own line style (solid, dashed, dotted, dash-dot, long dash) so states
//! stay apart in greyscale print. Map colour maps are the perceptually uniform viridis,
//! inferno, magma and cividis from the `colorous` crate, or a grey ramp for print.
//!
//! Sizes follow the print size: `width_px / dpi` inches wide, text at 9 pt, lines 0.5-1 pt.

pub mod axes;
mod figure;
mod legend;
pub mod outline;
mod pdf;
pub mod plot;
pub mod raster;
mod scene;
mod text;
mod tree;

pub use axes::{AxisTicks, Coord, Edge, Region, Tick, axis_ticks};
pub use figure::{
    BeamGeometry, LEAST_LABEL_PT, Layout, MAX_FIGURE_PIXELS, MAX_WIDTH_PX, PANEL_MAX_ASPECT,
    PANEL_MAX_HEIGHT, USUAL_LABEL_PT, beam_geometry, narrowest_width_px, overlay_layout,
};
pub use outline::{Ring, ring_area, simplify_ring, trace_outlines};
pub use pdf::check_scene as pdf_check_figure;
pub use raster::colorize;
pub use tree::{MIN_ID_PT, TreeLayout, tree_layout};

use ndarray::ArrayView2;
use std::fmt;

/// Sky coordinates as the figure needs them.
pub trait SkyAxes: Sync {
    /// Zero-based pixel (x = column, y = row; (0, 0) = centre of the first pixel) to
    /// (longitude, latitude) in degrees; None outside the projection.
    fn pixel_to_sky(&self, x: f64, y: f64) -> Option<(f64, f64)>;
    /// The inverse of [`SkyAxes::pixel_to_sky`].
    fn sky_to_pixel(&self, lon: f64, lat: f64) -> Option<(f64, f64)>;
    /// True for equatorial frames (RA/Dec: sexagesimal labels, RA in hours), false for
    /// galactic (decimal degrees, l and b).
    fn equatorial(&self) -> bool;
    /// Local pixel size in degrees.
    fn pixel_scale_deg(&self) -> f64;
    /// The angular length in degrees of one pixel step along x and along y at (x, y): the two
    /// differ on maps of pixels that are not square on the sky. By default the great-circle
    /// lengths of steps of half a pixel either side of (x, y); None where those leave the
    /// projection.
    fn pixel_scales_deg(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let step = |dx: f64, dy: f64| -> Option<f64> {
            let (l0, b0) = self.pixel_to_sky(x - dx, y - dy)?;
            let (l1, b1) = self.pixel_to_sky(x + dx, y + dy)?;
            let (b0, b1) = (b0.to_radians(), b1.to_radians());
            let h = ((b1 - b0) / 2.0).sin().powi(2)
                + b0.cos() * b1.cos() * ((l1 - l0).to_radians() / 2.0).sin().powi(2);
            Some(2.0 * h.sqrt().min(1.0).asin().to_degrees())
        };
        let (sx, sy) = (step(0.5, 0.0)?, step(0.0, 0.5)?);
        (sx.is_finite() && sy.is_finite() && sx > 0.0 && sy > 0.0).then_some((sx, sy))
    }
}

/// How one leaf is drawn.
#[derive(Debug, Clone, PartialEq)]
pub struct LeafStyle {
    /// The id used in the label map.
    pub id: i32,
    /// Text written next to the leaf (usually its id); empty for a leaf outlined without a
    /// label.
    pub label: String,
    /// Index into [`Overlay::states`] (or [`tree_png`]'s states): colour and line style.
    pub state: usize,
    /// Peak position in pixel coordinates (x, y), where the label is placed near.
    pub peak: (f64, f64),
}

/// A legend entry for one state.
#[derive(Debug, Clone, PartialEq)]
pub struct StateLegend {
    pub name: String,
    pub description: String,
}

/// Everything drawn on a map figure.
pub struct Overlay<'a> {
    /// Rows = y; row 0 is the bottom of the figure. NaN = missing (drawn neutral grey).
    pub map: ArrayView2<'a, f32>,
    /// Colour-bar label; `^-2`/`^{...}` write exponents, `_2`/`_{...}` indices.
    pub unit_label: String,
    /// Footprints: structure id per pixel, -1 for none (a run's label map as it is, or one of
    /// leaves only). Same shape as `map`; only the ids of `leaves` are outlined.
    pub labels: ArrayView2<'a, i32>,
    /// Optional branch footprints, outlined thinly when [`Style::show_branches`] is set.
    pub branch_labels: Option<ArrayView2<'a, i32>>,
    /// Optional relabelling of `branch_labels`: a pixel labelled `l >= 0` belongs to the
    /// branch outline `branch_of[l]` (-1 for none; labels beyond the slice count as none).
    /// It lets a run's own label map serve for the branches with no copy of it.
    pub branch_of: Option<&'a [i32]>,
    /// The leaves to outline and label; ids in `labels` that are not listed are not drawn.
    /// Labels are placed greedily in this order; one that finds no free place near its
    /// peak is left out rather than printed over another.
    pub leaves: Vec<LeafStyle>,
    /// Legend entries, indexed by [`LeafStyle::state`].
    pub states: Vec<StateLegend>,
    /// Sky coordinates; None gives pixel axes.
    pub sky: Option<&'a dyn SkyAxes>,
    /// Beam: major and minor FWHM and position angle in degrees east of north. Without sky
    /// axes the FWHM are in pixels; with them, in units of [`SkyAxes::pixel_scale_deg`] (the
    /// pixel, for square pixels), and the ellipse drawn is the one the beam makes on the
    /// pixel grid where it is drawn, so pixels of unequal sides give it its true shape.
    pub beam: Option<(f64, f64, f64)>,
    /// Scale bar: length in pixels along x and its text, e.g. "0.1 pc".
    pub scale_bar: Option<(f64, String)>,
    /// A title drawn above the map.
    pub title: Option<String>,
    /// What the figure shows, for the document's own title (SVG `<title>`, PDF Title) when
    /// no `title` is drawn, e.g. the map's file name; "map" when neither is given.
    pub name: Option<String>,
}

/// How values map to the colour scale.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stretch {
    Linear,
    Sqrt,
    /// Logarithmic between the limits when the lower limit is positive, otherwise
    /// log(1 + 1000 t) of the linear position t.
    Log,
    /// asinh(t / 0.1) / asinh(10) of the linear position t.
    Asinh,
}

/// The data values at the ends of the colour scale.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Limits {
    /// Percentiles (0-100) of the finite values in the shown region.
    Percentiles(f64, f64),
    /// Fixed values.
    Values(f64, f64),
}

/// Colour maps for the map image.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColorMap {
    Viridis,
    Inferno,
    Magma,
    Cividis,
    /// Black (low) to white (high), for greyscale print.
    Grey,
}

/// How a figure looks.
#[derive(Debug, Clone, PartialEq)]
pub struct Style {
    pub stretch: Stretch,
    pub limits: Limits,
    pub colormap: ColorMap,
    /// Width of the figure in pixels; the height follows the map's aspect (bounded for very
    /// tall or wide maps, see [`MapFigure::y_stretch`]) and the margins.
    pub width_px: u32,
    /// Print resolution: the figure is `width_px / dpi` inches wide and text is 9 pt.
    pub dpi: f64,
    /// Outline branches thinly as well as leaves.
    pub show_branches: bool,
    /// Zoom to (x0, y0, width, height) in pixels.
    pub region: Option<(usize, usize, usize, usize)>,
}

impl Default for Style {
    fn default() -> Self {
        Style {
            stretch: Stretch::Linear,
            limits: Limits::Percentiles(0.5, 99.5),
            colormap: ColorMap::Viridis,
            width_px: 1600,
            dpi: 300.0,
            show_branches: false,
            region: None,
        }
    }
}

/// One structure of the tree.
#[derive(Debug, Clone, PartialEq)]
pub struct TreeNode {
    pub id: u32,
    pub parent: Option<u32>,
    /// Peak level.
    pub top: f64,
    /// Merge level (where it joins its parent), or the floor for top-level structures.
    pub bottom: f64,
    /// Must agree with the tree: a structure marked as a leaf may not have children.
    pub is_leaf: bool,
    /// Index into the states legend, or None (drawn in dark grey).
    pub state: Option<usize>,
    /// Whether the leaf's id is written above it, where there is room (ignored for
    /// structures with children). A map figure that labels only some leaves passes the same
    /// choice here, so both figures name the same leaves.
    pub show_id: bool,
}

/// Why a figure could not be drawn.
#[derive(Debug, Clone, PartialEq)]
pub enum RenderError {
    /// The map has no pixels.
    EmptyMap,
    /// An input array does not have the map's shape.
    ShapeMismatch {
        what: &'static str,
        expected: (usize, usize),
        found: (usize, usize),
    },
    /// The zoom region is empty or leaves the map.
    BadRegion((usize, usize, usize, usize)),
    /// A style value cannot be used.
    BadStyle(String),
    /// The figure is narrower than the map beside its axis and colour-bar labels needs at its
    /// resolution; `needed` is the narrowest width that works (found as the layout decides).
    TooNarrow { width: u32, dpi: f64, needed: u32 },
    /// The shown region has no finite value to set the colour scale.
    NoData,
    /// The tree input is inconsistent.
    BadTree(String),
    /// Encoding the output failed.
    Encode(String),
}

impl fmt::Display for RenderError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RenderError::EmptyMap => {
                write!(f, "the map has no pixels, so there is nothing to draw")
            }
            RenderError::ShapeMismatch {
                what,
                expected,
                found,
            } => write!(
                f,
                "the {what} is {} x {} pixels but the map is {} x {}; give arrays of the map's shape",
                found.1, found.0, expected.1, expected.0
            ),
            RenderError::BadRegion((x, y, w, h)) => write!(
                f,
                "the zoom region x={x} y={y} width={w} height={h} is empty or leaves the map; choose one inside it"
            ),
            RenderError::BadStyle(m) => write!(f, "{m}"),
            RenderError::TooNarrow { width, dpi, needed } if *needed > MAX_WIDTH_PX => write!(
                f,
                "a figure {width} pixels wide at {dpi} dpi leaves no room for the map beside its axis and colour-bar labels; this map needs a figure at least {needed} pixels wide at that resolution, more than the widest drawn ({MAX_WIDTH_PX}), so give a lower resolution or draw a part of the map"
            ),
            RenderError::TooNarrow { width, dpi, needed } => write!(
                f,
                "a figure {width} pixels wide at {dpi} dpi leaves no room for the map beside its axis and colour-bar labels; this map needs a figure at least {needed} pixels wide at that resolution, so give a larger width or a lower resolution"
            ),
            RenderError::NoData => write!(
                f,
                "the shown region has no finite value, so the colour scale cannot be set; give fixed limits or another region"
            ),
            RenderError::BadTree(m) => write!(f, "{m}"),
            RenderError::Encode(m) => write!(f, "the figure could not be encoded: {m}"),
        }
    }
}

impl std::error::Error for RenderError {}

impl From<RenderError> for crate::error::Error {
    fn from(e: RenderError) -> Self {
        match e {
            RenderError::Encode(_) => crate::error::Error::internal(e.to_string()),
            _ => crate::error::Error::usage(e.to_string()),
        }
    }
}

/// The text of a label without its markup (`^{h}` becomes `h`).
pub fn plain_text(s: &str) -> String {
    text::plain(s)
}

/// Draws the map figure as PNG bytes (RGB, resolution recorded).
pub fn render_png(o: &Overlay, s: &Style) -> Result<Vec<u8>, RenderError> {
    figure::scene(o, s)?.to_png()
}

/// Draws the map figure as SVG text.
pub fn render_svg(o: &Overlay, s: &Style) -> Result<String, RenderError> {
    figure::scene(o, s)?.to_svg()
}

/// Draws the map figure as a one-page PDF of its print size.
pub fn render_pdf(o: &Overlay, s: &Style) -> Result<Vec<u8>, RenderError> {
    figure::scene(o, s)?.to_pdf()
}

/// The map figure in its three formats, drawn once, with how its leaf labels fared.
pub struct MapFigure {
    pub png: Vec<u8>,
    pub svg: String,
    pub pdf: Vec<u8>,
    /// Leaves to be labelled (a non-empty [`LeafStyle::label`]) whose peak lies inside the
    /// figure's frame.
    pub leaves_in_frame: usize,
    /// Of those, the leaves left without a label because no free place was found near them
    /// (crowded parts of the map; a figure of a smaller region has room for them).
    pub labels_left_out: usize,
    /// For a map too tall or too wide to be drawn at equal scales in a figure of bounded
    /// size: how many times larger the scale along y is than along x (below 1 for a tall
    /// map). None when the map is drawn at equal scales.
    pub y_stretch: Option<f64>,
    /// The beam's drawn size (the smaller side of its box) in figure pixels, if drawn.
    pub beam_px: Option<f64>,
    /// The scale bar was asked for and left out, the map's frame too narrow for it.
    pub scale_bar_left_out: bool,
    /// The leaf labels' text size in points where it is smaller than the usual size
    /// ([`USUAL_LABEL_PT`]), down to [`LEAST_LABEL_PT`]: a map too crowded for every label
    /// at the usual size.
    pub smaller_label_pt: Option<f64>,
    /// The figure's width in pixels where it is narrower than the requested width: a tall map
    /// whose panel is narrower than that width allows (the figure is not left blank beside
    /// it).
    pub narrowed_to: Option<u32>,
}

/// A beam drawn smaller than this many figure pixels across (its box's smaller side) is
/// said to be too small to be seen (common practice: a few pixels of a printed figure).
pub const LEAST_VISIBLE_BEAM_PX: f64 = 4.0;

/// Draws the map figure as PNG, SVG and PDF ([`render_png`], [`render_svg`]) from one layout.
pub fn render_map_figure(o: &Overlay, s: &Style) -> Result<MapFigure, RenderError> {
    let sc = figure::scene(o, s)?;
    // The encodings share nothing but the scene; each compresses an image of the map.
    let (png, (svg, pdf)) = rayon::join(
        || sc.to_png(),
        || rayon::join(|| sc.to_svg(), || sc.to_pdf()),
    );
    Ok(MapFigure {
        png: png?,
        svg: svg?,
        pdf: pdf?,
        leaves_in_frame: sc.leaves_to_label,
        labels_left_out: sc.labels_left_out,
        y_stretch: sc.y_stretch,
        beam_px: sc.beam_px,
        smaller_label_pt: sc.smaller_label_pt,
        narrowed_to: (sc.width < s.width_px).then_some(sc.width),
        scale_bar_left_out: sc.scale_bar_left_out,
    })
}

/// Draws the tree diagram as PNG bytes. The level axis is logarithmic when `s.stretch` is
/// [`Stretch::Log`], linear otherwise; `level_label` titles it.
pub fn tree_png(
    nodes: &[TreeNode],
    states: &[StateLegend],
    level_label: &str,
    s: &Style,
) -> Result<Vec<u8>, RenderError> {
    tree::scene(nodes, states, level_label, s)?.to_png()
}

/// The tree diagram in its three formats, drawn once, with how its leaf ids fared.
pub struct TreeFigure {
    pub png: Vec<u8>,
    pub svg: String,
    pub pdf: Vec<u8>,
    /// The leaves chosen for an id ([`TreeNode::show_id`]).
    pub leaves: usize,
    /// Of those, the leaves drawn without their id: on a diagram too crowded for every id at
    /// [`MIN_ID_PT`], ids are placed highest peak first where they meet no line and no other
    /// id, and the rest are left out (counted here for the caller to say; the figure, meant
    /// for a paper, does not).
    pub ids_left_out: usize,
}

/// Draws the tree diagram as PNG, SVG and PDF ([`tree_png`], [`tree_svg`]) from one layout.
pub fn render_tree_figure(
    nodes: &[TreeNode],
    states: &[StateLegend],
    level_label: &str,
    s: &Style,
) -> Result<TreeFigure, RenderError> {
    let sc = tree::scene(nodes, states, level_label, s)?;
    let (png, (svg, pdf)) = rayon::join(
        || sc.to_png(),
        || rayon::join(|| sc.to_svg(), || sc.to_pdf()),
    );
    Ok(TreeFigure {
        png: png?,
        svg: svg?,
        pdf: pdf?,
        leaves: sc.leaves_to_label,
        ids_left_out: sc.labels_left_out,
    })
}

/// Draws the tree diagram as SVG text (see [`tree_png`]).
pub fn tree_svg(
    nodes: &[TreeNode],
    states: &[StateLegend],
    level_label: &str,
    s: &Style,
) -> Result<String, RenderError> {
    tree::scene(nodes, states, level_label, s)?.to_svg()
}

/// Okabe & Ito (2008) colours, in the order states use them: vermillion, orange, sky blue,
/// reddish purple, bluish green, blue, yellow. Yellow comes last because it is the bright end
/// of the default colour maps.
const STATE_COLOURS: [(u8, u8, u8); 7] = [
    (0xD5, 0x5E, 0x00),
    (0xE6, 0x9F, 0x00),
    (0x56, 0xB4, 0xE9),
    (0xCC, 0x79, 0xA7),
    (0x00, 0x9E, 0x73),
    (0x00, 0x72, 0xB2),
    (0xF0, 0xE4, 0x42),
];

/// Colour of state `i`.
pub(crate) fn state_colour(i: usize) -> scene::Rgba {
    let (r, g, b) = STATE_COLOURS[i % STATE_COLOURS.len()];
    scene::Rgba(r, g, b, 255)
}

/// Dash pattern of state `i` for a line of width `w` (empty = solid); round caps make the
/// short dashes of the dotted styles into dots.
pub(crate) fn state_dash(i: usize, w: f64) -> Vec<f64> {
    match i % 5 {
        0 => Vec::new(),
        1 => vec![3.5 * w, 2.2 * w],
        2 => vec![0.01, 2.0 * w],
        3 => vec![4.0 * w, 2.0 * w, 0.01, 2.0 * w],
        _ => vec![8.0 * w, 3.0 * w],
    }
}

/// Name of the line style of state `i` (for SVG classes and documentation).
pub fn state_line_style(i: usize) -> &'static str {
    ["solid", "dashed", "dotted", "dash-dot", "long-dash"][i % 5]
}

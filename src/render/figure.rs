//! The map figure: layout (frame, margins, ticks, beam, scale bar, colour bar, legend) and the
//! drawing of every element into a [`Scene`].

use super::axes::{self, AxisTicks, Edge, Region};
use super::legend;
use super::outline::{ring_area, simplify_ring, trace_outlines, trace_outlines_mapped};
use super::plot::clip_segment;
use super::raster::{self, Lut, Scale};
use super::scene::{Item, Line, Paint, PathData, Rgba, Scene};
use super::text;
use super::{
    ColorMap, LeafStyle, Overlay, RenderError, SkyAxes, Stretch, Style, state_colour, state_dash,
    state_line_style,
};
use ndarray::s;

/// The beam ellipse: centre and two conjugate semi-axis vectors, all in map pixels. They are
/// the images on the pixel grid of the beam's semi-major and semi-minor axes on the sky: at
/// right angles on square pixels, not necessarily on pixels of unequal sides.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BeamGeometry {
    pub centre: (f64, f64),
    /// Half the major FWHM along the major axis.
    pub semi_major: (f64, f64),
    /// Half the minor FWHM along the minor axis.
    pub semi_minor: (f64, f64),
}

impl BeamGeometry {
    /// Points around the ellipse in map pixels.
    pub fn polygon(&self, n: usize) -> Vec<(f64, f64)> {
        (0..n)
            .map(|i| {
                let t = std::f64::consts::TAU * i as f64 / n as f64;
                let (c, s) = (t.cos(), t.sin());
                (
                    self.centre.0 + c * self.semi_major.0 + s * self.semi_minor.0,
                    self.centre.1 + c * self.semi_major.1 + s * self.semi_minor.1,
                )
            })
            .collect()
    }
    /// Half the ellipse's extent along x and along y, in map pixels.
    pub fn half_extent(&self) -> (f64, f64) {
        (
            self.semi_major.0.hypot(self.semi_minor.0),
            self.semi_major.1.hypot(self.semi_minor.1),
        )
    }
}

/// The beam of FWHM `major` x `minor` at position angle `pa_deg` (east of north), centred at
/// `at` (map pixels). With `sky`, the FWHM are in units of [`SkyAxes::pixel_scale_deg`] and
/// the ellipse is the beam's on the sky mapped onto the pixel grid at `at` (north and east and
/// the pixel's size along each taken there), so it keeps its shape on the sky whatever the
/// pixels' shape; without, the FWHM are in pixels, north is +y and east is -x.
pub fn beam_geometry(
    major: f64,
    minor: f64,
    pa_deg: f64,
    sky: Option<&dyn SkyAxes>,
    at: (f64, f64),
) -> BeamGeometry {
    // The pixel offsets of one unit (a pixel, or the sky's nominal pixel) north and east.
    let mut north = (0.0, 1.0);
    let mut east = (-1.0, 0.0);
    if let Some(sky) = sky
        && let Some((lon, lat)) = sky.pixel_to_sky(at.0, at.1)
    {
        let d = sky.pixel_scale_deg().abs().max(1e-9);
        let cosd = lat.to_radians().cos().max(1e-6);
        // Central differences of a step of one unit either way.
        let dir = |p: Option<(f64, f64)>, q: Option<(f64, f64)>| {
            let ((x1, y1), (x0, y0)) = (p?, q?);
            let (dx, dy) = ((x1 - x0) / 2.0, (y1 - y0) / 2.0);
            (dx.is_finite() && dy.is_finite() && dx.hypot(dy) > 0.0).then_some((dx, dy))
        };
        if let (Some(n), Some(e)) = (
            dir(
                sky.sky_to_pixel(lon, lat + d),
                sky.sky_to_pixel(lon, lat - d),
            ),
            dir(
                sky.sky_to_pixel(lon + d / cosd, lat),
                sky.sky_to_pixel(lon - d / cosd, lat),
            ),
        ) {
            north = n;
            east = e;
        }
    }
    let pa = pa_deg.to_radians();
    let (c, s) = (pa.cos(), pa.sin());
    // The major axis points along PA, the minor along PA + 90 degrees, both on the sky.
    let u = (c * north.0 + s * east.0, c * north.1 + s * east.1);
    let v = (-s * north.0 + c * east.0, -s * north.1 + c * east.1);
    BeamGeometry {
        centre: at,
        semi_major: (u.0 * major / 2.0, u.1 * major / 2.0),
        semi_minor: (v.0 * minor / 2.0, v.1 * minor / 2.0),
    }
}

/// Where everything goes on a map figure, in output pixels (origin top left, y down).
#[derive(Debug, Clone)]
pub struct Layout {
    /// The figure's width: the requested width, or less for a map whose panel (bounded in
    /// height, see [`PANEL_MAX_HEIGHT`]) is narrower than the width would allow.
    pub width: u32,
    pub height: u32,
    /// The shown part of the map: x0, y0, width, height in map pixels.
    pub region: Region,
    /// The map frame: left, top, width, height (whole output pixels).
    pub frame: (f64, f64, f64, f64),
    /// Output pixels per map pixel along x and y.
    pub kx: f64,
    pub ky: f64,
    /// For a map too tall or too wide to be drawn at equal scales in a figure of bounded size
    /// (see [`PANEL_MAX_HEIGHT`] and [`PANEL_MAX_ASPECT`]): how many times larger the scale
    /// along y is than along x on the sky (`ky / kx` for square pixels); None at equal scales.
    /// Pixels of unequal sides on the sky are drawn at equal scales on the sky, so `ky / kx`
    /// is then the ratio of their sides.
    pub y_stretch: Option<f64>,
    /// Data values at the ends of the colour scale.
    pub limits: (f64, f64),
    pub ticks: AxisTicks,
    /// The beam, in map pixels.
    pub beam: Option<BeamGeometry>,
    /// Ends of the scale bar in map pixels.
    pub scale_bar: Option<((f64, f64), (f64, f64))>,
    /// Text size in output pixels (9 pt).
    pub font_px: f64,
    colorbar: (f64, f64, f64, f64),
    legend_top: f64,
    legend_rows: Vec<Vec<legend::Entry>>,
    /// The scale bar's text stands to its left rather than over it.
    scale_text_beside: bool,
    /// The scale bar and its text are left out, as the frame is too narrow for them.
    pub scale_bar_left_out: bool,
    /// The north and east arrows of a map whose north is not up or whose east is not to the
    /// left: their common origin and the unit directions of north and east, in figure
    /// pixels (y down).
    pub compass: Option<Compass>,
}

impl Layout {
    /// Map pixel coordinates to output pixels.
    pub fn map_to_figure(&self, x: f64, y: f64) -> (f64, f64) {
        let (x0, y0, _, _) = self.region;
        let (fx, fy, _, fh) = self.frame;
        (
            fx + (x - (x0 as f64 - 0.5)) * self.kx,
            fy + fh - (y - (y0 as f64 - 0.5)) * self.ky,
        )
    }
    /// Output pixels to map pixel coordinates.
    pub fn figure_to_map(&self, fx: f64, fy: f64) -> (f64, f64) {
        let (x0, y0, _, _) = self.region;
        let (ox, oy, _, fh) = self.frame;
        (
            (fx - ox) / self.kx + x0 as f64 - 0.5,
            (oy + fh - fy) / self.ky + y0 as f64 - 0.5,
        )
    }
}

/// Sizes derived from the print resolution.
struct Metrics {
    fs: f64,
    pt: f64,
    pad: f64,
    gap: f64,
    tick: f64,
}

impl Metrics {
    fn new(dpi: f64) -> Self {
        let pt = dpi / 72.0;
        let fs = 9.0 * pt;
        Metrics {
            fs,
            pt,
            pad: 0.6 * fs,
            gap: 0.35 * fs,
            tick: 0.35 * fs,
        }
    }
}

/// The narrowest figure, in pixels, that leaves room for a map panel at `dpi`: the margins of
/// the axis titles, ticks and colour bar with tick labels of no width, and the panel's
/// smallest width. Narrower figures are refused whatever the map; wider ones may still lack
/// room for long tick labels, which the layout finds.
pub fn narrowest_width_px(dpi: f64) -> u32 {
    let m = Metrics::new(dpi);
    let fs = m.fs;
    let left = m.pad + 1.2 * fs + m.gap + m.gap + m.tick;
    let right = m.gap * 2.0 + 0.8 * fs + m.tick + m.gap + m.gap + 1.2 * fs + m.pad;
    (left + right + min_panel(dpi)).ceil() as u32
}

/// The widest map figure drawn, in pixels (`--width` is refused above it).
pub const MAX_WIDTH_PX: u32 = 20_000;

/// The largest figure drawn, in pixels (150 megapixels: a square figure about 12000 pixels
/// across, 41 inches at 300 dpi). Drawing takes about 16 bytes per figure pixel (the resampled
/// map, its colours, the canvas and its clip), so this bounds a figure's memory near 2.4 GB.
pub const MAX_FIGURE_PIXELS: u64 = 150_000_000;

/// Refuses a figure of more than [`MAX_FIGURE_PIXELS`].
pub(crate) fn check_figure_size(width: u32, height: u32) -> Result<(), RenderError> {
    let n = width as u64 * height as u64;
    if n > MAX_FIGURE_PIXELS {
        return Err(RenderError::BadStyle(format!(
            "a figure of {width} x {height} pixels is larger than cairn draws ({} megapixels); lower --width",
            MAX_FIGURE_PIXELS / 1_000_000
        )));
    }
    Ok(())
}

/// The narrowest map panel drawn, in pixels: one inch at `dpi` (at least 16 pixels), so that
/// the narrowest figure accepted still shows the map (cairn's choice).
fn min_panel(dpi: f64) -> f64 {
    dpi.max(16.0)
}

fn validate(o: &Overlay, s: &Style) -> Result<Region, RenderError> {
    let (h, w) = o.map.dim();
    if h == 0 || w == 0 {
        return Err(RenderError::EmptyMap);
    }
    if o.labels.dim() != (h, w) {
        return Err(RenderError::ShapeMismatch {
            what: "leaf label map",
            expected: (h, w),
            found: o.labels.dim(),
        });
    }
    if let Some(b) = o.branch_labels
        && b.dim() != (h, w)
    {
        return Err(RenderError::ShapeMismatch {
            what: "branch label map",
            expected: (h, w),
            found: b.dim(),
        });
    }
    if !(s.dpi.is_finite() && s.dpi >= 30.0 && s.dpi <= 2400.0) {
        return Err(RenderError::BadStyle(format!(
            "dpi must be between 30 and 2400, got {}",
            s.dpi
        )));
    }
    let region = s.region.unwrap_or((0, 0, w, h));
    let (x0, y0, rw, rh) = region;
    if rw == 0 || rh == 0 || x0 + rw > w || y0 + rh > h {
        return Err(RenderError::BadRegion(region));
    }
    if let Some((maj, min, pa)) = o.beam
        && !(maj > 0.0 && min > 0.0 && min <= maj && pa.is_finite())
    {
        return Err(RenderError::BadStyle(format!(
            "the beam needs 0 < minor <= major and a finite angle, got major {maj}, minor {min}, angle {pa}"
        )));
    }
    if let Some((len, _)) = &o.scale_bar
        && !(*len > 0.0 && len.is_finite())
    {
        return Err(RenderError::BadStyle(format!(
            "the scale bar length must be positive, got {len}"
        )));
    }
    Ok(region)
}

fn colorbar_ticks(lo: f64, hi: f64, stretch: Stretch) -> Vec<(f64, String)> {
    let t = if stretch == Stretch::Log && lo > 0.0 {
        axes::log_ticks(lo, hi)
    } else {
        Vec::new()
    };
    if t.len() >= 2 {
        t
    } else {
        // About five steps; where rounding the step up to 1, 2 or 5 leaves two labels only,
        // a finer step.
        let t = axes::linear_ticks(lo, hi, 5);
        if t.len() < 3 {
            let finer = axes::linear_ticks(lo, hi, 8);
            if finer.len() > t.len() {
                return finer;
            }
        }
        t
    }
}

/// The map panel is at most this many times as tall as the width available to it.
pub const PANEL_MAX_HEIGHT: f64 = 2.0;
/// At equal scales along x and y, the map panel's long side is at most this many times its
/// short side; a map more elongated than that is drawn at unequal scales.
pub const PANEL_MAX_ASPECT: f64 = 16.0;

/// The map panel's width and height in whole output pixels, for `avail` pixels of width and a
/// region of `rw` x `rh` map pixels, where `rh` counts pixels of the length on the sky of a
/// pixel's step along x (so pixels twice as tall on the sky as wide count twice).
///
/// Ordinary maps fill the width at equal scales along x and y. The figure's width is fixed, so
/// only its height follows the map, and it is bounded either way:
/// * a map taller than [`PANEL_MAX_HEIGHT`] times the width gets a panel of that height,
///   narrowed to keep equal scales, but not to less than 1/[`PANEL_MAX_ASPECT`] of its
///   height; a map taller still is drawn into that panel at a smaller scale along y;
/// * a map wider than [`PANEL_MAX_ASPECT`] times its height gets a panel of the full width and
///   1/[`PANEL_MAX_ASPECT`] of it in height, drawn at a larger scale along y;
/// * no panel is less than `least_h` tall (room for what is written inside it, the scale
///   bar's text), the map then drawn at a larger scale along y.
///
/// The third value is false when the scales differ by more than the rounding to whole pixels.
fn panel_size(avail: f64, rw: usize, rh: f64, least_h: f64) -> (f64, f64, bool) {
    let rw = rw as f64;
    let natural = (avail * rh / rw).round().max(1.0);
    let max_h = (PANEL_MAX_HEIGHT * avail).floor();
    let min_h = (avail / PANEL_MAX_ASPECT)
        .ceil()
        .max(least_h.ceil())
        .max(1.0);
    if natural > max_h {
        let narrowest = (max_h / PANEL_MAX_ASPECT).ceil().clamp(1.0, avail);
        let equal = (max_h * rw / rh).round();
        let w = equal.max(narrowest).min(avail);
        (w, max_h, w == equal)
    } else if natural < min_h {
        (avail, min_h, false)
    } else {
        (avail, natural, true)
    }
}

/// The length on the sky of a pixel's step along y over that along x, at the centre of
/// `region`; 1 without sky axes, where they cannot say, or where the two differ by less than
/// one part in a thousand (a projection's own small distortion, not worth a figure of another
/// shape).
fn pixel_aspect(sky: Option<&dyn SkyAxes>, region: Region) -> f64 {
    let (x0, y0, rw, rh) = region;
    let c = (
        x0 as f64 + (rw as f64 - 1.0) / 2.0,
        y0 as f64 + (rh as f64 - 1.0) / 2.0,
    );
    match sky.and_then(|s| s.pixel_scales_deg(c.0, c.1)) {
        Some((sx, sy)) if ((sy / sx) - 1.0).abs() > 1e-3 => sy / sx,
        _ => 1.0,
    }
}

/// Computes the layout of a map figure (including the display limits of the colour scale).
pub fn overlay_layout(o: &Overlay, s: &Style) -> Result<Layout, RenderError> {
    let mut lay = frame_layout(o, s)?;
    lay.compass = place_compass(o, s, &lay);
    Ok(lay)
}

/// The arrows' length and the gap from their tips to their letters, in text sizes.
const COMPASS_ARROW: f64 = 2.0;
const COMPASS_GAP: f64 = 0.35;

/// Directions of north and east on the figure at the centre of the shown part (unit vectors
/// in figure pixels, y down), from the sky axes; None without them or off the sky.
fn sky_directions(o: &Overlay, lay: &Layout) -> Option<((f64, f64), (f64, f64))> {
    let sky = o.sky?;
    let (x0, y0, w, h) = lay.region;
    let c = (
        x0 as f64 + (w as f64 - 1.0) / 2.0,
        y0 as f64 + (h as f64 - 1.0) / 2.0,
    );
    let (lon, lat) = sky.pixel_to_sky(c.0, c.1)?;
    let d = sky.pixel_scale_deg().abs().max(1e-9);
    let cosd = lat.to_radians().cos().max(1e-6);
    let dir = |p: Option<(f64, f64)>, q: Option<(f64, f64)>| -> Option<(f64, f64)> {
        let ((x1, y1), (xa, ya)) = (p?, q?);
        // Map pixels to figure pixels: y turns down.
        let (dx, dy) = ((x1 - xa) * lay.kx, -(y1 - ya) * lay.ky);
        let n = dx.hypot(dy);
        (n.is_finite() && n > 0.0).then(|| (dx / n, dy / n))
    };
    let north = dir(
        sky.sky_to_pixel(lon, (lat + d).min(90.0)),
        sky.sky_to_pixel(lon, (lat - d).max(-90.0)),
    )?;
    let east = dir(
        sky.sky_to_pixel(lon + d / cosd, lat),
        sky.sky_to_pixel(lon - d / cosd, lat),
    )?;
    Some((north, east))
}

/// Where north and east arrows go on a figure whose north is not up (by more than a degree) or
/// whose east is not to the left, in a corner of the frame clear of the beam, the scale bar
/// and, where one is, of the leaves' outlines: the upper left first, then the upper right,
/// the lower right, the lower left beside the beam, and the middles of the edges (the first
/// free, else the least crossed).
fn place_compass(o: &Overlay, s: &Style, lay: &Layout) -> Option<Compass> {
    let (north, east) = sky_directions(o, lay)?;
    let up = -north.1;
    let turned = north.0.atan2(up).to_degrees().abs() > 1.0;
    // East to the left of north as seen on the figure (the sky seen from inside): the
    // cross product of north and east, y down, is negative.
    let mirrored = north.0 * east.1 - north.1 * east.0 > 0.0;
    if !(turned || mirrored) {
        return None;
    }
    let m = Metrics::new(s.dpi);
    let fs = m.fs;
    let (fx, fy, fw, fh) = lay.frame;
    // The box the arrows and letters take about their origin.
    let reach = COMPASS_ARROW * fs;
    let letter = COMPASS_GAP * fs + 0.5 * fs;
    let pts = [
        (0.0, 0.0),
        (north.0 * (reach + letter), north.1 * (reach + letter)),
        (east.0 * (reach + letter), east.1 * (reach + letter)),
    ];
    let pad = 0.45 * fs;
    let bx0 = pts.iter().map(|p| p.0).fold(f64::INFINITY, f64::min) - pad;
    let bx1 = pts.iter().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max) + pad;
    let by0 = pts.iter().map(|p| p.1).fold(f64::INFINITY, f64::min) - pad;
    let by1 = pts.iter().map(|p| p.1).fold(f64::NEG_INFINITY, f64::max) + pad;
    let (bw, bh) = (bx1 - bx0, by1 - by0);
    let inset = 0.6 * fs;
    if bw + 2.0 * inset > fw || bh + 2.0 * inset > fh {
        return None;
    }
    // What the compass keeps clear of: the beam's and the scale bar's boxes.
    let mut taken: Vec<Rect> = Vec::new();
    if let Some(b) = &lay.beam {
        let (ex, ey) = b.half_extent();
        let (cx, cy) = lay.map_to_figure(b.centre.0, b.centre.1);
        let (ex, ey) = (ex * lay.kx, ey * lay.ky);
        taken.push((cx - ex, cy - ey, cx + ex, cy + ey));
    }
    if let Some((a, b)) = lay.scale_bar {
        let (ax, ay) = lay.map_to_figure(a.0, a.1);
        let (bx, by) = lay.map_to_figure(b.0, b.1);
        // The bar and its text, generously (the text's width is not known here).
        let h = 2.0 * fs;
        let w = (bx - ax).abs().max(4.0 * fs);
        let cx = 0.5 * (ax + bx);
        taken.push((cx - w, ay.min(by) - h, cx + w, ay.max(by) + 0.5 * fs));
    }
    let covered = leaf_pixels_counter(o, lay, s.show_branches);
    // The corners, the lower left beside the beam, then the middles of the edges.
    // (beside it when it stands in the lower left corner, else the corner itself).
    let beam_right = taken
        .first()
        .filter(|b| lay.beam.is_some() && b.0 < fx + fw / 2.0 && b.3 > fy + fh / 2.0)
        .map(|b| b.2);
    let corners = [
        (fx + inset, fy + inset),
        (fx + fw - inset - bw, fy + inset),
        (fx + fw - inset - bw, fy + fh - inset - bh),
        (
            beam_right.map_or(fx + inset, |r| r + 0.35 * fs),
            fy + fh - inset - bh,
        ),
        (fx + (fw - bw) / 2.0, fy + inset),
        (fx + (fw - bw) / 2.0, fy + fh - inset - bh),
        (fx + inset, fy + (fh - bh) / 2.0),
        (fx + fw - inset - bw, fy + (fh - bh) / 2.0),
    ];
    let meets = |a: Rect, b: Rect| a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3;
    let chosen = least_crossed(corners, |(cx, cy)| {
        let bb = (cx, cy, cx + bw, cy + bh);
        let free = bb.2 <= fx + fw - inset && !taken.iter().any(|t| meets(*t, bb));
        free.then(|| covered(bb))
    });
    chosen.map(|(cx, cy)| ((cx - bx0, cy - by0), north, east))
}

/// The layout of a map figure but for its compass.
fn frame_layout(o: &Overlay, s: &Style) -> Result<Layout, RenderError> {
    let region = validate(o, s)?;
    let (x0, y0, rw, rh) = region;
    let m = Metrics::new(s.dpi);
    let fs = m.fs;
    let lfs = 0.9 * fs; // tick labels
    let w_total = s.width_px as f64;

    let view = o.map.slice(s![y0..y0 + rh, x0..x0 + rw]);
    let limits = raster::display_limits(view, s.limits)?;
    // Pixels whose sides differ on the sky: the panel is drawn at equal scales on the sky,
    // from the pixel's lengths along x and y at the region's centre.
    let aspect = pixel_aspect(o.sky, region);
    // Right margin: colour bar, its labels and the unit label.
    let cb_ticks = colorbar_ticks(limits.0, limits.1, s.stretch);
    let cb_lab_w = cb_ticks
        .iter()
        .map(|(_, l)| text::width(l, lfs))
        .fold(0.0, f64::max);
    let cb_w = 0.8 * fs;
    let right = m.gap * 2.0 + cb_w + m.tick + m.gap + cb_lab_w + m.gap + 1.2 * fs + m.pad;
    let top = m.pad
        + if o.title.is_some() {
            1.15 * fs * 1.3 + m.gap
        } else {
            0.0
        };

    // Ticks: as many as fit without overlapping labels. A figure too narrow for the map
    // beside its labels gives the width it would need (left and right margins and the
    // narrowest panel).
    let fit = |w_total: f64| {
        let mut nb = 6usize;
        let mut nl = 7usize;
        loop {
            let ticks = axes::axis_ticks(o.sky, region, nb, nl);
            let left_lab_w = ticks
                .ticks
                .iter()
                .filter(|t| t.edge == Edge::Left)
                .map(|t| text::width(&t.label, lfs))
                .fold(0.0, f64::max);
            let left = m.pad + 1.2 * fs + m.gap + left_lab_w + m.gap + m.tick;
            let avail = (w_total - left - right).floor();
            let least_w = min_panel(s.dpi);
            if avail < least_w {
                return Err((left + right + least_w).ceil());
            }
            // The scale bar's text, beside the bar on the flattest panels (whose width is all
            // that is available), stays inside the frame with its halo and a gap above and
            // below, when the frame is wide enough to show the bar at all.
            let least_h = match &o.scale_bar {
                Some((len, label))
                    if len * avail / rw as f64 + m.gap + text::width(label, lfs)
                        <= avail - 1.2 * fs =>
                {
                    text::cap_height(lfs) + 2.0 * (0.16 * fs + m.gap)
                }
                _ => 1.0,
            };
            let (fw, fh, equal) = panel_size(avail, rw, rh as f64 * aspect, least_h);
            let kx = fw / rw as f64;
            let ky = fh / rh as f64;
            // Check overlaps along each labelled edge.
            let mut bottom: Vec<(f64, f64)> = ticks
                .ticks
                .iter()
                .filter(|t| t.edge == Edge::Bottom)
                .map(|t| ((t.x - (x0 as f64 - 0.5)) * kx, text::width(&t.label, lfs)))
                .collect();
            bottom.sort_by(|a, b| a.0.total_cmp(&b.0));
            let b_ok = bottom
                .windows(2)
                .all(|p| p[0].0 + p[0].1 / 2.0 + 1.5 * m.gap < p[1].0 - p[1].1 / 2.0);
            let mut leftp: Vec<f64> = ticks
                .ticks
                .iter()
                .filter(|t| t.edge == Edge::Left)
                .map(|t| (t.y - (y0 as f64 - 0.5)) * ky)
                .collect();
            leftp.sort_by(f64::total_cmp);
            let l_ok = leftp.windows(2).all(|p| p[1] - p[0] > 1.6 * lfs);
            // Two labels along the bottom that still overlap need a wider panel: their
            // distance grows with the panel's width, so the width that would part them is
            // found from their overlap and distance (the layout then tries again from it).
            // Labels at one place, which no width parts, and figures at the widest width cairn
            // draws ([`MAX_WIDTH_PX`]) keep them as they are.
            let parted = bottom.windows(2).all(|p| p[1].0 - p[0].0 > 1.0);
            if !b_ok && nb <= 2 && parted && w_total < f64::from(MAX_WIDTH_PX) {
                let need = bottom
                    .windows(2)
                    .map(|p| {
                        let sep = p[1].0 - p[0].0;
                        let overlap = p[0].1 / 2.0 + p[1].1 / 2.0 + 1.5 * m.gap - sep;
                        overlap.max(0.0) * avail / sep
                    })
                    .fold(0.0, f64::max);
                return Err((w_total + need + 1.0).ceil());
            }
            if (b_ok || nb <= 2) && (l_ok || nl <= 2) {
                return Ok((ticks, left, fw, fh, kx, ky, equal, avail));
            }
            if !b_ok && nb > 2 {
                nb -= 1;
            }
            if !l_ok && nl > 2 {
                nl -= 1;
            }
        }
    };
    let (ticks, left, fw, fh, kx, ky, equal, avail) = match fit(w_total) {
        Ok(v) => v,
        Err(need) => {
            // The narrowest width that works, found the way the layout decides.
            let mut w = need.max(w_total + 1.0);
            while let Err(n) = fit(w) {
                w = n.max(w + 1.0);
            }
            return Err(RenderError::TooNarrow {
                width: s.width_px,
                dpi: s.dpi,
                needed: w as u32,
            });
        }
    };
    let left = left.round();
    // The left axis title and the unit label are written along the frame's height, centred on
    // it: on a frame shorter than they are long, the margins above and below make room for
    // what reaches beyond it.
    let along = text::width(&ticks.left_title, fs).max(text::width(&o.unit_label, fs));
    let spill = ((along - fh) / 2.0).max(0.0);
    let top = top.max(m.pad + spill);
    let frame = (left, top.round(), fw, fh);

    // Legend rows below the axis title.
    // Only the states of the leaves drawn, and the branches' outlines when they are drawn.
    let mut shown = vec![false; o.states.len()];
    // On a zoom, the leaves with a pixel in the shown part only.
    let present: Option<Vec<bool>> = s.region.map(|_| {
        let n = listed_leaves(o).len();
        let mut seen = vec![false; n];
        for &l in o.labels.slice(s![y0..y0 + rh, x0..x0 + rw]).iter() {
            if l >= 0 && (l as usize) < n {
                seen[l as usize] = true;
            }
        }
        seen
    });
    for l in &o.leaves {
        let drawn = present
            .as_ref()
            .is_none_or(|p| l.id >= 0 && p.get(l.id as usize).copied().unwrap_or(false));
        if let Some(f) = shown.get_mut(l.state).filter(|_| drawn) {
            *f = true;
        }
    }
    let branches = s.show_branches
        && o.branch_labels.is_some()
        && o.branch_of.is_none_or(|of| of.iter().any(|&b| b >= 0));
    let keys = legend::keys(&o.states, &shown, branches);
    // A tall map's panel is narrower than the width available to it: the figure is then
    // narrowed to what it holds (the panel with its margins, the titles centred on the panel,
    // the legend's entries broken between words where they need it), rather than left blank
    // on the right, when that saves more than 2% of the width.
    let width = if fw < avail {
        let centred = |t: &str, size: f64| left + fw / 2.0 + text::width(t, size) / 2.0 + m.pad;
        let legend_w = keys
            .iter()
            .flat_map(|(_, words)| words.split(' '))
            .map(|word| legend::SAMPLE_FS * fs + m.gap + text::width(word, fs))
            .fold(0.0, f64::max);
        let title_w = o.title.as_deref().map_or(0.0, |t| centred(t, 1.15 * fs));
        let held = (left + fw + right)
            .max(centred(&ticks.bottom_title, fs))
            .max(title_w)
            .max(legend_w + 2.0 * m.pad)
            .ceil();
        // A map just over twice as tall as the width would leave a few pixels: not worth a
        // figure of another width than the one asked for.
        if w_total - held > (0.02 * w_total).max(m.pad) {
            held
        } else {
            w_total
        }
    } else {
        w_total
    };
    let rows = legend::rows(&keys, fs, m.gap, width - 2.0 * m.pad);
    let below = (m.tick + m.gap + 1.25 * lfs + m.gap + 1.3 * fs).max(spill + m.gap);
    let legend_top = frame.1 + fh + below + m.pad;
    let legend_h = rows.len() as f64 * 1.5 * fs;
    let height = (legend_top + legend_h + m.pad).ceil() as u32;
    check_figure_size(width as u32, height)?;

    let mut lay = Layout {
        width: width as u32,
        height,
        region,
        frame,
        kx,
        ky,
        y_stretch: (!equal).then_some(ky / kx / aspect),
        limits,
        ticks,
        beam: None,
        scale_bar: None,
        font_px: fs,
        colorbar: (left + fw + 2.0 * m.gap, frame.1, cb_w, fh),
        legend_top,
        legend_rows: rows,
        scale_text_beside: false,
        scale_bar_left_out: false,
        compass: None,
    };

    // Beam in the lower left corner unless leaves' outlines run there (then the upper left,
    // lower right or upper right, the first of the least crossed; on a flat panel always the
    // lower left), scale bar in the lower right unless leaves lie there, inside the frame.
    let inset = 0.6 * fs;
    // The width the beam takes from the left of the frame's lower edge (when it is there),
    // and the box it takes.
    let mut beam_room = 0.0;
    let mut beam_box: Option<Rect> = None;
    if let Some((maj, min, pa)) = o.beam {
        let probe = beam_geometry(maj, min, pa, o.sky, lay.figure_to_map(left, frame.1 + fh));
        let (ex, ey) = probe.half_extent();
        let (ex, ey) = (ex * kx, ey * ky);
        let (lx, rx) = (left + inset + ex, left + fw - inset - ex);
        let (ly, uy) = (frame.1 + fh - inset - ey, frame.1 + inset + ey);
        let over = inset + 0.3 * fs + 0.25 * fs + m.gap + text::cap_height(lfs) + inset;
        let centres = if fh >= over {
            vec![(lx, ly), (lx, uy), (rx, ly), (rx, uy)]
        } else {
            vec![(lx, ly)]
        };
        let (cx, cy) = {
            let covered = leaf_pixels_counter(o, &lay, s.show_branches);
            let near = 0.3 * fs;
            least_crossed(centres.iter().copied(), |(cx, cy)| {
                Some(covered((
                    cx - ex - near,
                    cy - ey - near,
                    cx + ex + near,
                    cy + ey + near,
                )))
            })
            .unwrap_or(centres[0])
        };
        if (cx, cy) == (lx, ly) {
            beam_room = 2.0 * ex + m.gap;
        }
        beam_box = Some((cx - ex, cy - ey, cx + ex, cy + ey));
        lay.beam = Some(beam_geometry(
            maj,
            min,
            pa,
            o.sky,
            lay.figure_to_map(cx, cy),
        ));
    }
    if let Some((len, label)) = &o.scale_bar {
        // The text is centred over the bar, in a corner of the frame (below); text wider
        // than the bar moves both inwards so that the text too ends an inset inside the
        // frame. A frame too short for the text
        // over the bar (a wide map's flat panel) has the text beside the bar, to its left,
        // both centred on the frame's height.
        // A frame too narrow for them both (a tall map's slim panel in a narrow figure) has
        // neither, and the figure says so.
        let over = inset + 0.3 * fs + 0.25 * fs + m.gap + text::cap_height(lfs) + inset;
        let (bar_w, tw) = (len * kx, text::width(label, lfs));
        let room = fw - 2.0 * inset;
        if (fh >= over && bar_w.max(tw) > room) || (fh < over && bar_w + m.gap + tw > room) {
            lay.scale_bar_left_out = true;
            return Ok(lay);
        }
        let (ex, ey) = if fh >= over {
            // The corner whose box holds the fewest pixels of the leaves' outlines: the lower
            // right unless outlines run under it, then the upper right, the upper left, the
            // lower left beside the beam, and the middles of the lower and upper edges (the
            // first of the least covered).
            let overhang = ((tw - bar_w) / 2.0).max(0.0);
            let (block_w, block_h) = (bar_w.max(tw), over - 2.0 * inset);
            let (right_x, left_x, mid_x) = (
                left + fw - inset - block_w,
                left + inset,
                left + (fw - block_w) / 2.0,
            );
            let (low_y, high_y) = (frame.1 + fh - inset - block_h, frame.1 + inset);
            let mut corners = vec![(right_x, low_y), (right_x, high_y), (left_x, high_y)];
            if beam_room + block_w <= room {
                corners.push((left_x + beam_room, low_y));
            }
            if mid_x - left - inset >= beam_room {
                corners.push((mid_x, low_y));
            }
            corners.push((mid_x, high_y));
            let block = |(x0, y0): (f64, f64)| -> Rect { (x0, y0, x0 + block_w, y0 + block_h) };
            // Not over the beam wherever it went (a corner beside it stays, when free).
            let clear = |c: &(f64, f64)| {
                beam_box.is_none_or(|bb| {
                    let b = block(*c);
                    b.2 <= bb.0 || bb.2 <= b.0 || b.3 <= bb.1 || bb.3 <= b.1
                })
            };
            if corners.iter().any(clear) {
                corners.retain(clear);
            }
            let covered = leaf_pixels_counter(o, &lay, s.show_branches);
            // Leaves just beside the box count too: an outline along the bar's end is as
            // much in the way as one under it.
            let near = 0.3 * fs;
            let best = least_crossed(corners.iter().copied(), |c| {
                let b = block(c);
                Some(covered((b.0 - near, b.1 - near, b.2 + near, b.3 + near)))
            });
            let b = block(best.unwrap_or(corners[0]));
            (b.0 + overhang + bar_w, b.3 - 0.3 * fs)
        } else {
            // A flat panel: the text beside the bar, both centred on the frame's height, at
            // the right end unless outlines run there; then the left end beside the beam, or
            // a place between (the first free, else the least crossed).
            lay.scale_text_beside = true;
            let block_w = tw + m.gap + bar_w;
            let h = (0.5 * fs).max(text::cap_height(lfs));
            let (lo, hi) = (left + inset + beam_room, left + fw - inset - block_w);
            let mut starts = vec![left + fw - inset - block_w];
            if lo <= hi {
                starts.push(lo);
                let n = (((hi - lo) / block_w).floor() as usize).min(16);
                starts.extend((1..n).map(|k| hi - (hi - lo) * k as f64 / n as f64));
            }
            let covered = leaf_pixels_counter(o, &lay, s.show_branches);
            let near = 0.3 * fs;
            let yc = frame.1 + fh / 2.0;
            let best = least_crossed(starts.iter().copied(), |x0| {
                Some(covered((
                    x0 - near,
                    yc - h - near,
                    x0 + block_w + near,
                    yc + h + near,
                )))
            });
            (best.unwrap_or(starts[0]) + block_w, yc)
        };
        let end = lay.figure_to_map(ex, ey);
        lay.scale_bar = Some(((end.0 - len, end.1), end));
    }
    Ok(lay)
}

/// A box on the figure: left, top, right, bottom.
type Rect = (f64, f64, f64, f64);

/// North and east arrows: their origin and the unit directions of north and east, in figure
/// pixels (y down).
pub type Compass = ((f64, f64), (f64, f64), (f64, f64));

/// Whether each label-map id is one of the leaves `o` lists (indexed by id, up to the largest).
fn listed_leaves(o: &Overlay) -> Vec<bool> {
    let n = o.leaves.iter().map(|l| l.id.max(-1) + 1).max().unwrap_or(0) as usize;
    let mut v = vec![false; n];
    for l in o.leaves.iter().filter(|l| l.id >= 0) {
        v[l.id as usize] = true;
    }
    v
}

/// Of `candidates` in order of preference, the first whose `cost` (from
/// [`leaf_pixels_counter`]) crosses no outline, else the first of the least cost; candidates
/// whose cost is None are passed over. None when every one is.
fn least_crossed<T: Copy>(
    candidates: impl IntoIterator<Item = T>,
    cost: impl Fn(T) -> Option<(usize, usize)>,
) -> Option<T> {
    let mut best: Option<(T, (usize, usize))> = None;
    for c in candidates {
        let Some(n) = cost(c) else {
            continue;
        };
        if best.is_none_or(|(_, k)| n < k) {
            best = Some((c, n));
        }
        if n.1 == 0 {
            break;
        }
    }
    best.map(|(c, _)| c)
}

/// A counter of what a box of the figure laid out by `lay` would hide of `o`'s leaves (and
/// of its branches' outlines, when `branches` are drawn): the number of leaves (and branches)
/// whose outline runs under it, and the map pixels where one does (pixels whose label differs
/// from their right or upper neighbour's, one of the two a listed leaf or a branch;
/// every pixel of a box up to about 40,000 map pixels, else a regular sample of that many,
/// each against the next sample, scaled up). Compared as a pair, fewer outlines first. The
/// inside of a leaf larger than the box (a zoom into one) does not count: only its outline
/// would be hidden.
fn leaf_pixels_counter<'a>(
    o: &'a Overlay,
    lay: &'a Layout,
    branches: bool,
) -> impl Fn(Rect) -> (usize, usize) + 'a {
    let listed = listed_leaves(o);
    // The drawn branch of each pixel (its outline's id, see `scene`), or -1.
    let branch_map = o.branch_labels.filter(|_| branches);
    let branch_at = move |y: usize, x: usize| -> i32 {
        let Some(bm) = branch_map else { return -1 };
        let l = bm[[y, x]];
        match o.branch_of {
            Some(of) if l >= 0 => of.get(l as usize).copied().unwrap_or(-1),
            Some(_) => -1,
            None => l,
        }
    };
    move |bb: Rect| {
        if listed.is_empty() && branch_map.is_none() {
            return (0, 0);
        }
        let (x0, y0, w, h) = lay.region;
        let (ax, ay) = lay.figure_to_map(bb.0, bb.3);
        let (bx, by) = lay.figure_to_map(bb.2, bb.1);
        let span = |a: f64, b: f64, lo: usize, len: usize| {
            let (a, b) = (a.min(b).round(), a.max(b).round());
            let (lo_f, hi_f) = (lo as f64, (lo + len) as f64 - 1.0);
            (a.clamp(lo_f, hi_f) as usize, b.clamp(lo_f, hi_f) as usize)
        };
        let (xa, xb) = span(ax, bx, x0, w);
        let (ya, yb) = span(ay, by, y0, h);
        let cells = (xb - xa + 1) * (yb - ya + 1);
        let step = ((cells as f64 / 40_000.0).sqrt().ceil() as usize).max(1);
        let is_listed = |l: i32| l >= 0 && listed.get(l as usize).copied().unwrap_or(false);
        let (nx, ny) = (o.labels.ncols(), o.labels.nrows());
        let mut count = 0;
        let mut crossed: Vec<i32> = Vec::new();
        for y in (ya..=yb).step_by(step) {
            for x in (xa..=xb).step_by(step) {
                // Against the next sample along x and along y, so that no outline passes
                // between samples unseen.
                let l = o.labels[[y, x]];
                let mut edge = false;
                for (i, j) in [(x + step, y), (x, y + step)] {
                    // Within the shown part: outlines beyond it are not drawn.
                    if i >= nx || j >= ny || i >= x0 + w || j >= y0 + h {
                        continue;
                    }
                    let k = o.labels[[j, i]];
                    if k != l {
                        for m in [k, l].into_iter().filter(|&m| is_listed(m)) {
                            edge = true;
                            if !crossed.contains(&m) {
                                crossed.push(m);
                            }
                        }
                    }
                    // Branches by their ids below -1, apart from the leaves' ids.
                    let (bk, bl) = (branch_at(j, i), branch_at(y, x));
                    if bk != bl {
                        for m in [bk, bl].into_iter().filter(|&m| m >= 0) {
                            edge = true;
                            if !crossed.contains(&(-2 - m)) {
                                crossed.push(-2 - m);
                            }
                        }
                    }
                }
                if edge {
                    count += step * step;
                }
            }
        }
        (crossed.len(), count)
    }
}

/// Items (numbered in the order added) bucketed on a square grid by the box (left, top,
/// right, bottom) each spans, so that a query looks only at the items near its own box.
struct Grid {
    cell: f64,
    cells: std::collections::HashMap<(i64, i64), Vec<usize>>,
}

impl Grid {
    fn new(cell: f64) -> Self {
        Grid {
            cell: cell.max(1.0),
            cells: std::collections::HashMap::new(),
        }
    }
    fn cells_of(&self, b: Rect) -> impl Iterator<Item = (i64, i64)> + use<> {
        let c = self.cell;
        let (i0, i1) = ((b.0 / c).floor() as i64, (b.2 / c).floor() as i64);
        let (j0, j1) = ((b.1 / c).floor() as i64, (b.3 / c).floor() as i64);
        (j0..=j1).flat_map(move |j| (i0..=i1).map(move |i| (i, j)))
    }
    /// Files item `k`, which spans the box `b`.
    fn insert(&mut self, k: usize, b: Rect) {
        for c in self.cells_of(b) {
            self.cells.entry(c).or_default().push(k);
        }
    }
    /// The items filed in the cells that the box `b` meets (an item may come more than once).
    fn near(&self, b: Rect) -> impl Iterator<Item = usize> + '_ {
        self.cells_of(b)
            .filter_map(|c| self.cells.get(&c))
            .flatten()
            .copied()
    }
}

/// The box spanned by the segment from `a` to `b`.
fn span(a: (f64, f64), b: (f64, f64)) -> Rect {
    (a.0.min(b.0), a.1.min(b.1), a.0.max(b.0), a.1.max(b.1))
}

/// Boxes (left, top, right, bottom) already taken on the figure, bucketed on a grid so a
/// query looks only at nearby boxes.
struct BoxIndex {
    boxes: Vec<Rect>,
    grid: Grid,
}

impl BoxIndex {
    fn new(cell: f64) -> Self {
        BoxIndex {
            boxes: Vec::new(),
            grid: Grid::new(cell),
        }
    }
    fn insert(&mut self, b: Rect) {
        self.grid.insert(self.boxes.len(), b);
        self.boxes.push(b);
    }
    /// Whether the segment from `a` to `b` passes through any box (along a stretch of
    /// positive length).
    fn crosses(&self, a: (f64, f64), b: (f64, f64)) -> bool {
        let hits = |r: Rect| clip_segment(a, b, r).is_some_and(|(s, e)| s != e);
        self.grid.near(span(a, b)).any(|k| hits(self.boxes[k]))
    }
    fn overlaps(&self, b: Rect) -> bool {
        self.grid.near(b).any(|k| {
            let p = self.boxes[k];
            b.2.min(p.2) > b.0.max(p.0) && b.3.min(p.3) > b.1.max(p.1)
        })
    }
}

/// The distance from point `p` to the segment a-b.
fn point_segment(p: (f64, f64), a: (f64, f64), b: (f64, f64)) -> f64 {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    (a.0 + t * dx - p.0).hypot(a.1 + t * dy - p.1)
}

/// The distance from the segment a-b to the box `r`, zero where they meet.
fn box_segment(r: Rect, a: (f64, f64), b: (f64, f64)) -> f64 {
    if clip_segment(a, b, r).is_some() {
        return 0.0;
    }
    let point_box = |p: (f64, f64)| {
        let dx = (r.0 - p.0).max(p.0 - r.2).max(0.0);
        let dy = (r.1 - p.1).max(p.1 - r.3).max(0.0);
        dx.hypot(dy)
    };
    [(r.0, r.1), (r.2, r.1), (r.0, r.3), (r.2, r.3)]
        .into_iter()
        .map(|c| point_segment(c, a, b))
        .fold(point_box(a).min(point_box(b)), f64::min)
}

/// Whether the segments p-q and a-b meet.
fn segments_meet(p: (f64, f64), q: (f64, f64), a: (f64, f64), b: (f64, f64)) -> bool {
    let cross = |o: (f64, f64), u: (f64, f64), v: (f64, f64)| {
        (u.0 - o.0) * (v.1 - o.1) - (u.1 - o.1) * (v.0 - o.0)
    };
    let (d1, d2) = (cross(p, q, a), cross(p, q, b));
    let (d3, d4) = (cross(a, b, p), cross(a, b, q));
    if d1 * d2 < 0.0 && d3 * d4 < 0.0 {
        return true;
    }
    point_segment(a, p, q) == 0.0
        || point_segment(b, p, q) == 0.0
        || point_segment(p, a, b) == 0.0
        || point_segment(q, a, b) == 0.0
}

/// The distance between the segments p-q and a-b.
fn segment_segment(p: (f64, f64), q: (f64, f64), a: (f64, f64), b: (f64, f64)) -> f64 {
    if segments_meet(p, q, a, b) {
        return 0.0;
    }
    point_segment(a, p, q)
        .min(point_segment(b, p, q))
        .min(point_segment(p, a, b))
        .min(point_segment(q, a, b))
}

/// Whether `p` lies inside closed rings (even-odd rule: holes are outside).
fn inside_rings(rings: &[Vec<(f64, f64)>], p: (f64, f64)) -> bool {
    let mut inside = false;
    for r in rings {
        for k in 0..r.len() {
            let (a, b) = (r[k], r[(k + 1) % r.len()]);
            if (a.1 > p.1) != (b.1 > p.1) && p.0 < a.0 + (p.1 - a.1) / (b.1 - a.1) * (b.0 - a.0) {
                inside = !inside;
            }
        }
    }
    inside
}

/// The point of closed rings nearest `p`.
fn nearest_on_rings(rings: &[Vec<(f64, f64)>], p: (f64, f64)) -> Option<(f64, f64)> {
    let mut best: Option<(f64, (f64, f64))> = None;
    for r in rings {
        for k in 0..r.len() {
            let (a, b) = (r[k], r[(k + 1) % r.len()]);
            let (dx, dy) = (b.0 - a.0, b.1 - a.1);
            let len2 = dx * dx + dy * dy;
            let t = if len2 > 0.0 {
                (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / len2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let q = (a.0 + t * dx, a.1 + t * dy);
            let d = (q.0 - p.0).hypot(q.1 - p.1);
            if best.is_none_or(|(bd, _)| d < bd) {
                best = Some((d, q));
            }
        }
    }
    best.map(|(_, q)| q)
}

/// A stretch of a leaf's drawn outline: its ends and the leaf's id.
type LeafSeg = ((f64, f64), (f64, f64), i32);

/// The leaves' drawn outlines as segments, each with its leaf, bucketed on a grid so a query
/// looks only at nearby segments.
struct SegIndex {
    segs: Vec<LeafSeg>,
    grid: Grid,
}

impl SegIndex {
    fn new(cell: f64) -> Self {
        SegIndex {
            segs: Vec::new(),
            grid: Grid::new(cell),
        }
    }
    fn insert(&mut self, a: (f64, f64), b: (f64, f64), id: i32) {
        self.grid.insert(self.segs.len(), span(a, b));
        self.segs.push((a, b, id));
    }
    /// The segments whose cells meet the box `b` grown by `radius`.
    fn near(&self, b: Rect, radius: f64) -> impl Iterator<Item = &LeafSeg> {
        let grown = (b.0 - radius, b.1 - radius, b.2 + radius, b.3 + radius);
        self.grid.near(grown).map(|k| &self.segs[k])
    }
    /// The distances from box `b` to the outline of leaf `own` and to the nearest outline of
    /// any other leaf; infinite when none lies within `radius` of the box. The search stops at
    /// the first outline of another leaf nearer than `stop`, whose distance is then given (and
    /// the own leaf's distance found so far), as a place that near another leaf is refused
    /// whatever the rest.
    fn distances(&self, b: Rect, own: i32, radius: f64, stop: f64) -> (f64, f64) {
        let (mut d_own, mut d_other) = (f64::INFINITY, f64::INFINITY);
        for &(p, q, id) in self.near(b, radius) {
            // The gap between the box and the segment's span is a lower bound of their
            // distance: a segment whose gap exceeds the nearest distance found so far (with a
            // margin far above rounding) cannot change it, so the exact distance is skipped.
            let best = if id == own { d_own } else { d_other };
            let s = span(p, q);
            let gx = (s.0 - b.2).max(b.0 - s.2).max(0.0);
            let gy = (s.1 - b.3).max(b.1 - s.3).max(0.0);
            if gx * gx + gy * gy > best * best * (1.0 + 1e-9) {
                continue;
            }
            let d = box_segment(b, p, q);
            if id == own {
                d_own = d_own.min(d);
            } else {
                d_other = d_other.min(d);
                if d_other < stop {
                    break;
                }
            }
        }
        (d_own, d_other)
    }
    /// Whether the segment from `a` to `b` comes within `clear` of the outline of a leaf other
    /// than `own`.
    fn near_other(&self, a: (f64, f64), b: (f64, f64), own: i32, clear: f64) -> bool {
        self.near(span(a, b), clear)
            .any(|&(p, q, id)| id != own && segment_segment(a, b, p, q) < clear)
    }
}

/// A leader line from a leaf's outline to its label: its two ends.
type Leader = ((f64, f64), (f64, f64));

/// The leaves' labels as placed at one size (see `scene`).
struct Placement<'a> {
    /// The labels' text size in figure pixels.
    label_fs: f64,
    /// Each label shown: its leaf, the baseline-left of its text, its leader line if any.
    shown: Vec<(&'a LeafStyle, f64, f64, Option<Leader>)>,
    /// Leaves to label (their peak inside the frame) and of those, the ones left out.
    to_label: usize,
    left_out: usize,
}

/// The smallest text size, in points, leaf labels are set at when a map is too crowded for
/// them at the usual size: 6 pt, about the least journals accept in a printed figure (common
/// practice; journals' figure guidelines ask for 6-8 pt at the least, from memory). The tree
/// diagram's ids, each alone in its column beside a line rather than among a map's
/// structures, go down to [`crate::render::MIN_ID_PT`].
pub const LEAST_LABEL_PT: f64 = 6.0;

/// The usual text size of leaf labels, in points: 0.85 of the figure's 9-point text.
pub const USUAL_LABEL_PT: f64 = 0.85 * 9.0;

/// The sizes leaf labels are tried at, largest first: `usual` (figure pixels), then steps of
/// about half a point down to [`LEAST_LABEL_PT`] (`pt` figure pixels per point).
fn label_sizes(usual: f64, pt: f64) -> Vec<f64> {
    let least = LEAST_LABEL_PT * pt;
    let mut sizes = vec![usual];
    let mut s = ((usual / pt - 0.5) * 2.0).floor() / 2.0;
    while s * pt >= least - 1e-9 && s * pt < usual {
        sizes.push(s * pt);
        s -= 0.5;
    }
    sizes
}

/// Builds the whole map figure.
pub(crate) fn scene(o: &Overlay, s: &Style) -> Result<Scene, RenderError> {
    let lay = overlay_layout(o, s)?;
    let m = Metrics::new(s.dpi);
    let fs = m.fs;
    let lfs = 0.9 * fs;
    let (x0, y0, rw, rh) = lay.region;
    let (fx, fy, fw, fh) = lay.frame;
    let title = o
        .title
        .clone()
        .or_else(|| o.name.clone())
        .unwrap_or_else(|| "map".to_string());
    let mut sc = Scene::new(lay.width, lay.height, s.dpi, &text::plain(&title));
    sc.clip = Some(lay.frame);
    sc.y_stretch = lay.y_stretch;
    sc.scale_bar_left_out = lay.scale_bar_left_out;
    let scale = Scale {
        lo: lay.limits.0,
        hi: lay.limits.1,
        stretch: s.stretch,
    };

    // The map image.
    let view = o.map.slice(s![y0..y0 + rh, x0..x0 + rw]);
    let (iw, ih) = (fw as usize, fh as usize);
    let vals = raster::resample(view, iw, ih);
    let lut = Lut::new(s.colormap);
    let mut rgb = vec![0u8; iw * ih * 3];
    for (k, (px, &v)) in rgb.chunks_exact_mut(3).zip(vals.iter()).enumerate() {
        let c = if v.is_nan() && s.colormap == ColorMap::Grey {
            // On a grey ramp plain grey would read as data: hatch missing pixels instead.
            let (i, j) = (k % iw, k / iw);
            if (i + j) % 8 < 2 {
                [150, 150, 150]
            } else {
                [235, 235, 235]
            }
        } else {
            lut.get(scale.pos(v as f64))
        };
        px.copy_from_slice(&c);
    }
    // Where every map pixel is at least a figure pixel, the vector outputs hold the map's
    // own pixels (each figure pixel above shows the map pixel under its centre, so the
    // two agree), unless missing pixels are hatched on a grey map, a pattern of figure pixels.
    let hatched = s.colormap == ColorMap::Grey && view.iter().any(|v| v.is_nan());
    let exact = (rw <= iw && rh <= ih && !hatched).then(|| {
        (
            rw as u32,
            rh as u32,
            raster::colorize_with(view, &scale, &lut),
        )
    });
    sc.items.push(Item::Image {
        x: fx as i32,
        y: fy as i32,
        w: iw as u32,
        h: ih as u32,
        rgb,
        exact,
    });

    // Outlines, traced on a window one pixel larger than the region so footprints cut by
    // the region's edge get their boundary outside the frame (clipped away).
    let (mh, mw) = o.map.dim();
    let wx0 = x0.saturating_sub(1);
    let wy0 = y0.saturating_sub(1);
    let wx1 = (x0 + rw + 1).min(mw);
    let wy1 = (y0 + rh + 1).min(mh);
    // Where a map pixel is smaller than a pixel of the figure, outlines keep only the corners
    // that move them by more than half a figure pixel, and leave out rings (small holes and
    // fragments) less than half a figure pixel across, except a footprint's largest: the
    // traced staircase is finer than the figure can show and would only make the files large
    // and slow to draw. The corners kept are still exact pixel corners.
    let coarse = lay.kx < 1.0 || lay.ky < 1.0;
    // Holes and separate pieces of a footprint (rings other than its largest) that enclose
    // less than one beam area are not outlined either: detail finer than the beam is noise
    // at the footprint's edge (pixels just below or above its merge level), and drawn it
    // hides the footprint's shape under many small rings. The label map keeps every pixel.
    let beam_px = o
        .beam
        .map(|(maj, min, pa)| {
            // The area of the ellipse drawn on the pixel grid (the FWHM may be in units of
            // the sky's nominal pixel): pi / (4 ln 2) FWHM_major FWHM_minor, common practice.
            let c = (x0 as f64 + rw as f64 / 2.0, y0 as f64 + rh as f64 / 2.0);
            let b = beam_geometry(maj, min, pa, o.sky, c);
            let det = (b.semi_major.0 * b.semi_minor.1 - b.semi_major.1 * b.semi_minor.0).abs();
            std::f64::consts::PI / std::f64::consts::LN_2 * det
        })
        .filter(|a| a.is_finite() && *a > 0.0);
    // The rings of a footprint as drawn, in figure pixels.
    let drawn_rings = |rings: &[Vec<(f64, f64)>]| -> Vec<Vec<(f64, f64)>> {
        let extent = |r: &[(f64, f64)]| {
            let (mut x0, mut y0, mut x1, mut y1) = (f64::MAX, f64::MAX, f64::MIN, f64::MIN);
            for &(x, y) in r {
                (x0, y0, x1, y1) = (x0.min(x), y0.min(y), x1.max(x), y1.max(y));
            }
            (x1 - x0).max(y1 - y0)
        };
        // The footprint's largest ring (the first of equal ones), which is always drawn.
        let areas: Vec<f64> = rings.iter().map(|r| ring_area(r).abs()).collect();
        let largest =
            (0..areas.len()).fold(0, |best, i| if areas[i] > areas[best] { i } else { best });
        let mut out = Vec::new();
        for (k, r) in rings.iter().enumerate() {
            if k != largest && beam_px.is_some_and(|b| areas[k] < b) {
                continue;
            }
            let pts: Vec<(f64, f64)> = r.iter().map(|&(x, y)| lay.map_to_figure(x, y)).collect();
            let pts = if coarse {
                if k != largest && extent(&pts) < 0.5 {
                    continue;
                }
                simplify_ring(&pts, 0.5)
            } else {
                pts
            };
            out.push(pts);
        }
        out
    };
    let ring_path = |drawn: &[Vec<(f64, f64)>]| {
        let mut d = PathData::new();
        for pts in drawn {
            for (i, &(a, b)) in pts.iter().enumerate() {
                if i == 0 {
                    d.move_to(a, b)
                } else {
                    d.line_to(a, b)
                }
            }
            d.close();
        }
        d
    };
    // The branches' outlines as drawn, in figure pixels (labels keep clear of them where they
    // can).
    let mut branch_rings: Vec<Vec<(f64, f64)>> = Vec::new();
    if s.show_branches
        && let Some(bl) = o.branch_labels
    {
        let window = bl.slice(s![wy0..wy1, wx0..wx1]);
        let offset = (wx0 as f64, wy0 as f64);
        let traced = match o.branch_of {
            Some(of) => trace_outlines_mapped(window, offset, |l| {
                if l >= 0 {
                    of.get(l as usize).copied().unwrap_or(-1)
                } else {
                    -1
                }
            }),
            None => trace_outlines(window, offset),
        };
        for (id, rings) in &traced {
            let drawn = drawn_rings(rings);
            let d = ring_path(&drawn);
            branch_rings.extend(drawn);
            sc.items.push(Item::Path {
                d,
                paints: legend::branch_paints(m.pt),
                clip: true,
                id: Some(format!("branch-{id}")),
                class: "branch".into(),
                label: None,
            });
        }
    }
    // Only the listed leaves are traced: the label map may hold other structures too.
    let listed = listed_leaves(o);
    let traced = trace_outlines_mapped(
        o.labels.slice(s![wy0..wy1, wx0..wx1]),
        (wx0 as f64, wy0 as f64),
        |l| {
            if l >= 0 && listed.get(l as usize).copied().unwrap_or(false) {
                l
            } else {
                -1
            }
        },
    );
    // The leaves' rings as drawn, in figure pixels (labels keep their distances to these).
    let drawn: std::collections::HashMap<i32, Vec<Vec<(f64, f64)>>> = traced
        .iter()
        .map(|(&id, rings)| (id, drawn_rings(rings)))
        .collect();
    // All dark casings first, then all coloured lines, so where two leaves share an edge
    // the gaps of one's dashes show the other's colour.
    let lw = 0.85 * m.pt;
    let mut colour_passes = Vec::new();
    for leaf in &o.leaves {
        let Some(rings) = drawn.get(&leaf.id) else {
            continue;
        };
        let dash = state_dash(leaf.state, lw);
        colour_passes.push(Item::Reuse {
            id: format!("leaf-{}", leaf.id),
            paints: vec![Paint::Stroke(Line {
                color: state_colour(leaf.state),
                width: lw,
                dash: dash.clone(),
                round: true,
            })],
            clip: true,
        });
        sc.items.push(Item::Path {
            d: ring_path(rings),
            paints: vec![Paint::Stroke(Line {
                color: Rgba(0, 0, 0, 200),
                width: lw + 1.1 * m.pt,
                dash,
                round: true,
            })],
            clip: true,
            id: Some(format!("leaf-{}", leaf.id)),
            class: format!("leaf state-{} {}", leaf.state, state_line_style(leaf.state)),
            label: Some(format!("leaf {}", leaf.id)),
        });
    }
    sc.items.extend(colour_passes);

    // Frame and ticks.
    sc.path(
        PathData::rect(fx, fy, fw, fh),
        vec![Paint::Stroke(Line::solid(Rgba::BLACK, 0.7 * m.pt))],
        "frame",
    );
    let mut marks = PathData::new();
    for t in &lay.ticks.ticks {
        let (px, py) = lay.map_to_figure(t.x, t.y);
        let (dx, dy) = match t.edge {
            Edge::Bottom => (0.0, m.tick),
            Edge::Top => (0.0, -m.tick),
            Edge::Left => (-m.tick, 0.0),
            Edge::Right => (m.tick, 0.0),
        };
        marks.move_to(px, py);
        marks.line_to(px + dx, py + dy);
    }
    if !marks.0.is_empty() {
        sc.path(
            marks,
            vec![Paint::Stroke(Line::solid(Rgba::BLACK, 0.6 * m.pt))],
            "ticks",
        );
    }
    for t in &lay.ticks.ticks {
        let (px, py) = lay.map_to_figure(t.x, t.y);
        match t.edge {
            Edge::Bottom => sc.text(
                &t.label,
                px,
                py + m.tick + m.gap,
                lfs,
                0.5,
                1.0,
                false,
                Rgba::BLACK,
                None,
            ),
            Edge::Left => sc.text(
                &t.label,
                px - m.tick - m.gap,
                py,
                lfs,
                1.0,
                0.5,
                false,
                Rgba::BLACK,
                None,
            ),
            _ => {}
        }
    }
    let title_y = fy + fh + m.tick + m.gap + 1.25 * lfs + m.gap + text::cap_height(fs);
    sc.text(
        &lay.ticks.bottom_title,
        fx + fw / 2.0,
        title_y,
        fs,
        0.5,
        0.0,
        false,
        Rgba::BLACK,
        None,
    );
    sc.text(
        &lay.ticks.left_title,
        m.pad + text::cap_height(fs),
        fy + fh / 2.0,
        fs,
        0.5,
        0.0,
        true,
        Rgba::BLACK,
        None,
    );
    if let Some(t) = &o.title {
        sc.text(
            t,
            fx + fw / 2.0,
            m.pad + text::cap_height(1.15 * fs),
            1.15 * fs,
            0.5,
            0.0,
            false,
            Rgba::BLACK,
            None,
        );
    }

    // Beam and scale bar.
    let white_halo = Some((Rgba(255, 255, 255, 235), 0.16 * fs));
    let mut keep_out: Vec<(f64, f64, f64, f64)> = Vec::new();
    if let Some(b) = &lay.beam {
        let pts: Vec<(f64, f64)> = b
            .polygon(96)
            .into_iter()
            .map(|(x, y)| lay.map_to_figure(x, y))
            .collect();
        let bbox = pts.iter().fold(
            (
                f64::INFINITY,
                f64::INFINITY,
                f64::NEG_INFINITY,
                f64::NEG_INFINITY,
            ),
            |b, &(x, y)| (b.0.min(x), b.1.min(y), b.2.max(x), b.3.max(y)),
        );
        keep_out.push(bbox);
        let side = (bbox.2 - bbox.0).min(bbox.3 - bbox.1);
        sc.beam_px = Some(side);
        // A beam a few outline widths across or more is a white ellipse outlined in black
        // (the outline centred on its edge); a smaller one, which an outline would fill and
        // enlarge, is filled black at its exact size over a thin white rim that sets it off
        // from a dark map.
        let line = 0.8 * m.pt;
        let paints = if side >= 4.0 * line {
            vec![
                Paint::Fill(Rgba(255, 255, 255, 255)),
                Paint::Stroke(Line::solid(Rgba::BLACK, line)),
            ]
        } else {
            vec![
                Paint::Stroke(Line::solid(Rgba(255, 255, 255, 255), 0.5 * m.pt)),
                Paint::Fill(Rgba::BLACK),
            ]
        };
        sc.path(PathData::polygon(&pts), paints, "beam");
    }
    if let (Some((a, b)), Some((_, label))) = (lay.scale_bar, &o.scale_bar) {
        let (ax, ay) = lay.map_to_figure(a.0, a.1);
        let (bx, by) = lay.map_to_figure(b.0, b.1);
        let cap = 0.25 * fs;
        let mut d = PathData::line(ax, ay, bx, by);
        d.move_to(ax, ay - cap);
        d.line_to(ax, ay + cap);
        d.move_to(bx, by - cap);
        d.line_to(bx, by + cap);
        sc.path(
            d,
            vec![
                Paint::Stroke(Line::solid(Rgba(255, 255, 255, 235), 2.6 * m.pt)),
                Paint::Stroke(Line::solid(Rgba::BLACK, 1.0 * m.pt)),
            ],
            "scale-bar",
        );
        let tw = text::width(label, lfs);
        // Leaf labels keep a gap from the bar and its text, beyond both halos.
        let clear = 0.3 * fs;
        if lay.scale_text_beside {
            let ch = text::cap_height(lfs);
            keep_out.push((
                ax - m.gap - tw - clear,
                ay - cap.max(ch / 2.0) - clear,
                bx + clear,
                ay + cap.max(ch / 2.0) + clear,
            ));
            sc.text(
                label,
                ax - m.gap,
                ay,
                lfs,
                1.0,
                0.5,
                false,
                Rgba::BLACK,
                white_halo,
            );
        } else {
            keep_out.push((
                ax.min(0.5 * (ax + bx) - tw / 2.0) - clear,
                ay - cap - m.gap - text::cap_height(lfs) - clear,
                bx.max(0.5 * (ax + bx) + tw / 2.0) + clear,
                ay + cap + clear,
            ));
            sc.text(
                label,
                0.5 * (ax + bx),
                ay - cap - m.gap,
                lfs,
                0.5,
                0.0,
                false,
                Rgba::BLACK,
                white_halo,
            );
        }
    }

    // North and east arrows of a turned or mirrored map, with a white halo like the scale
    // bar's, their letters beyond the tips.
    if let Some(((ox, oy), north, east)) = lay.compass {
        let reach = COMPASS_ARROW * fs;
        let head = 0.35 * fs;
        let mut d = PathData::new();
        let mut heads = PathData::new();
        for (u, letter) in [(north, "N"), (east, "E")] {
            let tip = (ox + u.0 * reach, oy + u.1 * reach);
            d.move_to(ox, oy);
            d.line_to(tip.0 - u.0 * 0.5 * head, tip.1 - u.1 * 0.5 * head);
            // The arrowhead: a triangle at the tip.
            let (px, py) = (-u.1, u.0);
            heads.move_to(tip.0, tip.1);
            heads.line_to(
                tip.0 - u.0 * head + px * 0.45 * head,
                tip.1 - u.1 * head + py * 0.45 * head,
            );
            heads.line_to(
                tip.0 - u.0 * head - px * 0.45 * head,
                tip.1 - u.1 * head - py * 0.45 * head,
            );
            heads.close();
            let g = COMPASS_GAP * fs + 0.3 * fs;
            let (lx, ly) = (tip.0 + u.0 * g, tip.1 + u.1 * g);
            keep_out.push((lx - 0.5 * fs, ly - 0.5 * fs, lx + 0.5 * fs, ly + 0.5 * fs));
            sc.text(
                letter,
                lx,
                ly,
                0.8 * fs,
                0.5,
                0.5,
                false,
                Rgba::BLACK,
                white_halo,
            );
            if let Some(Item::Path { class, .. }) = sc.items.last_mut() {
                *class = "compass-letter".into();
            }
            keep_out.push((
                ox.min(tip.0) - 0.3 * fs,
                oy.min(tip.1) - 0.3 * fs,
                ox.max(tip.0) + 0.3 * fs,
                oy.max(tip.1) + 0.3 * fs,
            ));
        }
        sc.path(
            d,
            vec![
                Paint::Stroke(Line::solid(Rgba(255, 255, 255, 235), 2.6 * m.pt)),
                Paint::Stroke(Line::solid(Rgba::BLACK, 1.0 * m.pt)),
            ],
            "compass",
        );
        sc.path(
            heads,
            vec![
                Paint::Stroke(Line::solid(Rgba(255, 255, 255, 235), 1.6 * m.pt)),
                Paint::Fill(Rgba::BLACK),
            ],
            "compass-heads",
        );
    }

    // Leaf labels, in two rounds. The rule: a label lies nearer its own leaf (its outline as
    // drawn, or inside it) than any other leaf, and touches no other leaf's outline; else it
    // goes farther out on a thin leader line that ends on its own leaf's outline; else it is
    // left out (and counted) rather than printed where it could be read as another leaf's.
    // First, greedy placement just outside each leaf, avoiding the beam, the scale bar and
    // earlier labels. Then the leaves still without a label try places farther out, joined
    // to the leaf by a leader line that crosses no label, no other leader and no other leaf.
    // Labels are set at 0.85 of the text size; where that leaves leaves without a label, at
    // smaller sizes down to LEAST_LABEL_PT (see `label_sizes`).
    let label_fs = USUAL_LABEL_PT / 9.0 * fs;
    // Half the width of a drawn outline with its dark casing.
    let half_line = 0.5 * (0.85 + 1.1) * m.pt;
    let mut outlines = SegIndex::new(2.0 * label_fs);
    for (&id, rings) in &drawn {
        for ring in rings {
            for k in 0..ring.len() {
                let (a, b) = (ring[k], ring[(k + 1) % ring.len()]);
                if a.0.max(b.0) >= fx - label_fs
                    && a.0.min(b.0) <= fx + fw + label_fs
                    && a.1.max(b.1) >= fy - label_fs
                    && a.1.min(b.1) <= fy + fh + label_fs
                {
                    outlines.insert(a, b, id);
                }
            }
        }
    }
    // The branches' outlines (drawn 1 pt wide), which a label keeps clear of where a place
    // clear of every line is found; a place that crosses one is taken only as a fallback.
    let mut branch_lines = SegIndex::new(2.0 * label_fs);
    for ring in &branch_rings {
        for k in 0..ring.len() {
            branch_lines.insert(ring[k], ring[(k + 1) % ring.len()], -1);
        }
    }
    let branch_clear = 0.5 * m.pt + 0.5;
    let clear_of_branches =
        |bb: Rect| branch_lines.distances(bb, -2, branch_clear, branch_clear).1 >= branch_clear;
    // The listed leaf under a point of the figure, if any (from the label map, so a label over
    // another leaf's inside is seen even far from that leaf's outline).
    let leaf_under = |p: (f64, f64)| -> Option<i32> {
        let (x, y) = lay.figure_to_map(p.0, p.1);
        let (xi, yi) = (x.round(), y.round());
        if xi < 0.0 || yi < 0.0 || xi >= mw as f64 || yi >= mh as f64 {
            return None;
        }
        let l = o.labels[[yi as usize, xi as usize]];
        (l >= 0 && listed.get(l as usize).copied().unwrap_or(false)).then_some(l)
    };
    // Distances from a label's ink box to its own leaf (zero when the box's centre is inside
    // it) and to the nearest other leaf (zero when the box meets another leaf), looking
    // `radius` around the box.
    // Both rounds refuse a place nearer another leaf than `clear`, so the search ends at the
    // first sign of one (a point of the box over another leaf: 0; an outline nearer than
    // `clear`: its distance), the own leaf's distance then left unknown (infinite).
    let clear = half_line + 0.5;
    let distances = |bb: Rect, own: i32, radius: f64| -> (f64, f64) {
        for i in 0..3 {
            for j in 0..3 {
                let p = (
                    bb.0 + 0.5 * i as f64 * (bb.2 - bb.0),
                    bb.1 + 0.5 * j as f64 * (bb.3 - bb.1),
                );
                if leaf_under(p).is_some_and(|l| l != own) {
                    return (f64::INFINITY, 0.0);
                }
            }
        }
        let (mut d_own, d_other) = outlines.distances(bb, own, radius, clear);
        if d_other < clear {
            return (f64::INFINITY, d_other);
        }
        let c = (0.5 * (bb.0 + bb.2), 0.5 * (bb.1 + bb.3));
        if drawn.get(&own).is_some_and(|r| inside_rings(r, c)) {
            d_own = 0.0;
        }
        (d_own, d_other)
    };
    // The labels' places at one size: the labels shown (with their leader lines), the leaves
    // to label (peak inside the frame) and those left without a label.
    let place = |label_fs: f64| -> Placement {
        let mut placed = BoxIndex::new(2.0 * label_fs);
        for b in &keep_out {
            placed.insert(*b);
        }
        let mut to_label = 0usize;
        let mut left_out = 0usize;
        // How much nearer its own leaf than any other a label must be (`margin`), and how far
        // from other leaves' outlines (beyond their drawn width) every label and leader keeps
        // (`clear`).
        let margin = 0.1 * label_fs;
        let cap_h = text::cap_height(label_fs);
        let hpad = 0.15 * label_fs;
        let inside = |bb: (f64, f64, f64, f64)| {
            bb.0 >= fx && bb.2 <= fx + fw && bb.1 >= fy && bb.3 <= fy + fh
        };
        // Leaves waiting for the second round: (leaf, its extent, label width, ink box).
        let mut waiting: Vec<(&LeafStyle, Rect, f64, Rect)> = Vec::new();
        let mut shown = Vec::new();
        for leaf in &o.leaves {
            let Some(rings) = drawn.get(&leaf.id) else {
                continue;
            };
            // A leaf with an empty label is outlined only.
            if leaf.label.is_empty() {
                continue;
            }
            let (px, py) = lay.map_to_figure(leaf.peak.0, leaf.peak.1);
            if px < fx || px > fx + fw || py < fy || py > fy + fh {
                continue;
            }
            to_label += 1;
            let w = text::width(&leaf.label, label_fs);
            let ink = text::ink_bounds(&leaf.label, label_fs);
            // The leaf's extent on the figure: labels go just outside it, so a small leaf is
            // never hidden under its own label.
            let (mut ex0, mut ey0, mut ex1, mut ey1) = (px, py, px, py);
            for &(qx, qy) in rings.iter().flatten() {
                ex0 = ex0.min(qx);
                ex1 = ex1.max(qx);
                ey0 = ey0.min(qy);
                ey1 = ey1.max(qy);
            }
            // Very large leaves keep their labels near the peak rather than at their far edge.
            let reach = 0.8 * label_fs;
            let (ex0, ex1) = (ex0.max(px - reach), ex1.min(px + reach));
            let (ey0, ey1) = (ey0.max(py - reach), ey1.min(py + reach));
            // The first place clear of labels and outlines; else the first clear of labels and of
            // other leaves' outlines; either nearer its own leaf than any other.
            let mut best: Option<(f64, f64)> = None;
            let mut fallback: Option<(f64, f64)> = None;
            'search: for ring in 1..=4 {
                let r = 0.25 * label_fs * ring as f64;
                // Baseline-left positions of the label around the leaf's extent.
                let cands = [
                    (ex1 + r, ey0 - r),
                    (ex0 - r - w, ey0 - r),
                    (ex1 + r, ey1 + r + cap_h),
                    (ex0 - r - w, ey1 + r + cap_h),
                    (px - w / 2.0, ey0 - r),
                    (px - w / 2.0, ey1 + r + cap_h),
                    (ex1 + r, py + cap_h / 2.0),
                    (ex0 - r - w, py + cap_h / 2.0),
                ];
                for (bx, by) in cands {
                    let bb = (bx - hpad, by - cap_h - hpad, bx + w + hpad, by + hpad);
                    if !inside(bb) || placed.overlaps(bb) {
                        continue;
                    }
                    let ib = (bx + ink.0, by + ink.1, bx + ink.2, by + ink.3);
                    let (d_own, d_other) = distances(ib, leaf.id, 4.0 * label_fs);
                    if d_other < clear || d_other < d_own + margin {
                        continue;
                    }
                    if d_own >= clear && clear_of_branches(ib) {
                        best = Some((bx, by));
                        break 'search;
                    }
                    fallback = fallback.or(Some((bx, by)));
                }
            }
            match best.or(fallback) {
                Some((bx, by)) => {
                    placed.insert((bx - hpad, by - cap_h - hpad, bx + w + hpad, by + hpad));
                    shown.push((leaf, bx, by, None));
                }
                None => waiting.push((leaf, (ex0, ey0, ex1, ey1), w, ink)),
            }
        }
        // Second round: label centres on circles around the extent's centre, sixteen directions
        // per circle, up to about five label heights beyond the leaf. The leader runs from the
        // point of the leaf's outline nearest the label to the label's box.
        let mut leaders: Vec<((f64, f64), (f64, f64))> = Vec::new();
        let gap = 0.2 * label_fs;
        for (leaf, (ex0, ey0, ex1, ey1), w, ink) in waiting {
            let rings = &drawn[&leaf.id];
            let (cx, cy) = (0.5 * (ex0 + ex1), 0.5 * (ey0 + ey1));
            let half = (0.5 * (w + 2.0 * hpad), 0.5 * (cap_h + 2.0 * hpad));
            let (mut best, mut crossing) = (None, None);
            'far: for ring in 1..=8 {
                let r = 0.5 * (ex1 - ex0).hypot(ey1 - ey0)
                    + half.0.hypot(half.1)
                    + 0.6 * label_fs * ring as f64;
                for dir in 0..16 {
                    let a = std::f64::consts::PI * dir as f64 / 8.0;
                    let (lx, ly) = (cx + r * a.cos(), cy - r * a.sin());
                    let bb = (lx - half.0, ly - half.1, lx + half.0, ly + half.1);
                    if !inside(bb) || placed.overlaps(bb) {
                        continue;
                    }
                    if leaders
                        .iter()
                        .any(|&(p, q)| clip_segment(p, q, bb).is_some())
                    {
                        continue;
                    }
                    let (bx, by) = (lx - half.0 + hpad, ly + half.1 - hpad);
                    let ib = (bx + ink.0, by + ink.1, bx + ink.2, by + ink.3);
                    let (_, d_other) = distances(ib, leaf.id, clear);
                    if d_other < clear {
                        continue;
                    }
                    // The leader: from the point of the leaf's drawn outline nearest the label's
                    // centre to the point of the label's box nearest that.
                    let Some(from) = nearest_on_rings(rings, (lx, ly)) else {
                        continue;
                    };
                    if inside_rings(rings, (lx, ly))
                        || leaf_under(from).is_some_and(|l| l != leaf.id)
                    {
                        continue;
                    }
                    let to = (from.0.clamp(bb.0, bb.2), from.1.clamp(bb.1, bb.3));
                    let len = (to.0 - from.0).hypot(to.1 - from.1);
                    if len <= 2.0 * gap {
                        continue;
                    }
                    if placed.crosses(from, to)
                        || outlines.near_other(from, to, leaf.id, clear)
                        || leaders.iter().any(|&(p, q)| segments_meet(p, q, from, to))
                    {
                        continue;
                    }
                    // A place whose label meets no branch's outline ends the search; the
                    // first that does is kept in case none is found.
                    let candidate = Some((bx, by, bb, (from, to)));
                    if clear_of_branches(ib) {
                        best = candidate;
                        break 'far;
                    }
                    crossing = crossing.or(candidate);
                }
            }
            match best.or(crossing) {
                Some((bx, by, bb, leader)) => {
                    placed.insert(bb);
                    leaders.push(leader);
                    shown.push((leaf, bx, by, Some(leader)));
                }
                None => left_out += 1,
            }
        }
        Placement {
            label_fs,
            shown,
            to_label,
            left_out,
        }
    };
    // The usual size first; smaller ones until every leaf is labelled, the one that leaves
    // the fewest out kept (the larger of equals). A map of thousands of leaves, most of them
    // finding no place at the usual size, is not tried smaller: a point or two of text does
    // not label a field that crowded (a --region or --labels does), and each try takes as
    // long as the first, about a second there.
    let sizes = label_sizes(label_fs, m.pt);
    let mut chosen = place(sizes[0]);
    let mut step = 0;
    let hopeless = chosen.to_label > 1000 && 2 * chosen.left_out > chosen.to_label;
    if !hopeless {
        for (k, &size) in sizes.iter().enumerate().skip(1) {
            if chosen.left_out == 0 {
                break;
            }
            let p = place(size);
            if p.left_out < chosen.left_out {
                (chosen, step) = (p, k);
            }
        }
    }
    sc.leaves_to_label = chosen.to_label;
    sc.labels_left_out = chosen.left_out;
    sc.smaller_label_pt = (step > 0).then_some(chosen.label_fs / m.pt);
    let label_fs = chosen.label_fs;
    for (leaf, bx, by, leader) in chosen.shown {
        if let Some((a, b)) = leader {
            sc.items.push(Item::Path {
                d: PathData::line(a.0, a.1, b.0, b.1),
                paints: vec![
                    Paint::Stroke(Line::solid(Rgba(255, 255, 255, 230), 1.6 * m.pt)),
                    Paint::Stroke(Line::solid(Rgba::BLACK, 0.6 * m.pt)),
                ],
                clip: false,
                id: Some(format!("leader-{}", leaf.id)),
                class: "leaf-leader".into(),
                label: None,
            });
        }
        sc.text(
            &leaf.label,
            bx,
            by,
            label_fs,
            0.0,
            0.0,
            false,
            Rgba::BLACK,
            white_halo,
        );
        if let Some(Item::Path { class, id, .. }) = sc.items.last_mut() {
            *class = "leaf-label".into();
            *id = Some(format!("label-{}", leaf.id));
        }
    }

    // Colour bar.
    let (cx, cy, cw, ch) = lay.colorbar;
    let (cwi, chi) = (cw.round().max(1.0) as u32, ch as u32);
    let mut cb = Vec::with_capacity((cwi * chi * 3) as usize);
    for j in 0..chi {
        let t = 1.0 - (j as f64 + 0.5) / chi as f64;
        let c = raster::color_at(s.colormap, t);
        for _ in 0..cwi {
            cb.extend_from_slice(&c);
        }
    }
    sc.items.push(Item::Image {
        x: cx.round() as i32,
        y: cy as i32,
        w: cwi,
        h: chi,
        rgb: cb,
        exact: None,
    });
    let cx = cx.round();
    sc.path(
        PathData::rect(cx, cy, cwi as f64, ch),
        vec![Paint::Stroke(Line::solid(Rgba::BLACK, 0.6 * m.pt))],
        "colorbar-frame",
    );
    let mut cmarks = PathData::new();
    let mut last_y = f64::INFINITY;
    let mut labels = Vec::new();
    for (v, l) in colorbar_ticks(lay.limits.0, lay.limits.1, s.stretch) {
        if v < lay.limits.0 || v > lay.limits.1 {
            continue;
        }
        let y = cy + ch - scale.pos(v) * ch;
        let xr = cx + cwi as f64;
        cmarks.move_to(xr, y);
        cmarks.line_to(xr + m.tick, y);
        if last_y - y >= 1.3 * lfs {
            labels.push((y, l));
            last_y = y;
        }
    }
    sc.path(
        cmarks,
        vec![Paint::Stroke(Line::solid(Rgba::BLACK, 0.6 * m.pt))],
        "colorbar-ticks",
    );
    let lab_x = cx + cwi as f64 + m.tick + m.gap;
    let mut max_w: f64 = 0.0;
    for (y, l) in labels {
        max_w = max_w.max(text::width(&l, lfs));
        sc.text(&l, lab_x, y, lfs, 0.0, 0.5, false, Rgba::BLACK, None);
    }
    let unit_x = (lab_x + max_w + m.gap + text::cap_height(fs)).min(lay.width as f64 - m.pad);
    sc.text(
        &o.unit_label,
        unit_x,
        cy + ch / 2.0,
        fs,
        0.5,
        0.0,
        true,
        Rgba::BLACK,
        None,
    );

    // Legend of states.
    legend::draw(
        &mut sc,
        &lay.legend_rows,
        m.pad,
        lay.legend_top,
        fs,
        m.gap,
        &legend::SampleLines {
            width: lw,
            casing: lw + 1.1 * m.pt,
            pt: m.pt,
        },
    );
    Ok(sc)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A colour bar whose about-five steps round up to two labels only (0.05 and 0.10 on
    /// 0.0098-0.117) gets the finer step of 0.02 instead; one with three or more keeps its own.
    #[test]
    fn colour_bars_get_at_least_three_labels_where_a_finer_step_gives_them() {
        let labels = |lo: f64, hi: f64| -> Vec<String> {
            colorbar_ticks(lo, hi, Stretch::Linear)
                .into_iter()
                .map(|t| t.1)
                .collect()
        };
        assert_eq!(
            labels(0.0098, 0.117),
            ["0.02", "0.04", "0.06", "0.08", "0.10"]
        );
        assert_eq!(labels(0.0, 1.0), ["0.0", "0.2", "0.4", "0.6", "0.8", "1.0"]);
    }

    /// The gap test that skips segments in `SegIndex::distances` never changes its result:
    /// with no early stop, both distances equal the minima over every segment the grid
    /// offers, taken in full, on random outlines and boxes (a seeded splitmix64 stream).
    #[test]
    fn skipped_segments_never_change_the_distances() {
        let mut state = 0x5eed_u64;
        let mut next = move || {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut index = SegIndex::new(8.0);
        for _ in 0..3000 {
            let a = (200.0 * next(), 200.0 * next());
            let b = (a.0 + 10.0 * (next() - 0.5), a.1 + 10.0 * (next() - 0.5));
            index.insert(a, b, (next() * 6.0) as i32);
        }
        for _ in 0..2000 {
            let (x, y) = (200.0 * next(), 200.0 * next());
            let b = (x, y, x + 30.0 * next(), y + 10.0 * next());
            let own = (next() * 6.0) as i32;
            let radius = 40.0 * next();
            let (mut own_full, mut other_full) = (f64::INFINITY, f64::INFINITY);
            for &(p, q, id) in index.near(b, radius) {
                let d = box_segment(b, p, q);
                if id == own {
                    own_full = own_full.min(d);
                } else {
                    other_full = other_full.min(d);
                }
            }
            let got = index.distances(b, own, radius, 0.0);
            assert_eq!(got, (own_full, other_full), "box {b:?}");
            // With an early stop, a distance to another leaf below it is still found.
            let stop = 2.0;
            let (_, other) = index.distances(b, own, radius, stop);
            assert_eq!(other < stop, other_full < stop, "box {b:?}");
        }
    }
}

//! Scientific x-y plots (for `cairn compare`): markers with error bars, fitted lines,
//! histogram-like step lines, thin grey reference lines, a legend and notes, on linear or
//! logarithmic axes, written as PNG or SVG.
//!
//! The inputs are plain data ([`Plot`], [`Series`], [`Guide`]). Each series is drawn in the
//! Okabe & Ito colour of its `style` index (as states are in the map figure), with a marker
//! shape of its own (circle, square, triangle, diamond, inverted triangle, pentagon, cross)
//! and the line style of the same index (solid, dashed, dotted, dash-dot, long dash), so
//! series stay apart in greyscale print and for readers with colour-vision deficiency.
//!
//! Axes carry ticks on all four sides, pointing inwards; labelled ticks sit at round values
//! (1-2-5 steps on linear axes, decades on logarithmic ones with minor ticks at 2..9). The
//! legend and the notes go into inner corners of the frame (the legend also stacked on the
//! notes in theirs), chosen together so that between them they cover the fewest drawn data
//! and never each other; a legend or notes that the frame has no room for, or that would
//! cover data (a marker, a fitted line or two error-bar ends) in every corner, go under the
//! plot instead (the legend's entries in rows, the notes wrapped to the figure's width, never
//! between a value and its unit), and the figure grows to hold them. A series may be drawn
//! pale (points left out of a fit, shown for context). Points, lines and error bars are
//! clipped to the frame.
//! Values that cannot be shown (not finite, or not positive on a logarithmic axis) are left
//! out; a line breaks where it meets one.
//!
//! The SVG holds one `<g>` per series (`id="series-N"`, `class="series style-S"`, the legend
//! text as `aria-label`) and one `<g id="guides">` with a path per guide, so the figure can be
//! edited by hand. Each guide's label (in `<g id="guide-labels">`, over the data) is written
//! along its own line, as in published figures: turned to the line's slope on the page
//! (reading left to right; in the SVG the glyphs are drawn level in the label's own frame and
//! turned by the path's `transform`), centred on the line with the line cut under the text,
//! as near the line's visible end as the data allow, crossed by no other guide, overlapping no
//! other label, the legend or the notes, and covering as few data as the plot allows. Only
//! where no place along its line is clear does a label stand level beside its line (or on
//! it), placed so that its own line is clearly the nearest. Both outputs are byte-identical
//! from run to run.

use super::RenderError;
use super::axes::sci_label;
use super::scene::{
    Item, Line, Paint, PathData, Rgba, Scene, Seg, Turn, num, path_string, stroke_attrs, xml_escape,
};
use super::text;
use super::{state_colour, state_dash};
use std::fmt::Write as _;

/// How values map to positions along an axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum AxisScale {
    #[default]
    Linear,
    /// Logarithmic; values that are not positive are not drawn.
    Log10,
}

/// One set of data.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Series {
    /// Legend text (markup as in axis labels); empty leaves the series out of the legend.
    pub label: String,
    /// Index into the shared colours, marker shapes and line styles.
    pub style: usize,
    /// Drawn as markers, or as a step line when `steps` is set.
    pub points: Vec<(f64, f64)>,
    /// Lower and upper ends (absolute y values) of each point's error bar; one per point.
    pub y_errors: Option<Vec<(f64, f64)>>,
    /// Left and right ends (absolute x values) of each point's error bar; one per point.
    pub x_errors: Option<Vec<(f64, f64)>>,
    /// A polyline (e.g. a fitted power law) drawn with the style's line pattern.
    pub line: Option<Vec<(f64, f64)>>,
    /// Draw `points` as a histogram-like step line: each point is a bin centre, the bin edges
    /// lie midway between neighbouring centres (midway in log10 on a logarithmic x axis).
    pub steps: bool,
    /// Draw the markers pale (points shown for context, left out of a fit or test).
    pub faded: bool,
}

/// A thin grey reference line (e.g. constant column density), labelled along itself near its
/// visible end where the data leave room (level beside it where no place along it is clear).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Guide {
    pub label: String,
    pub points: Vec<(f64, f64)>,
}

/// Everything drawn on an x-y plot.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Plot {
    pub title: Option<String>,
    /// Axis titles; `^{...}` writes exponents, `_{...}` indices, e.g. `"M [M_{sun}]"`.
    pub x_label: String,
    pub y_label: String,
    pub x_scale: AxisScale,
    pub y_scale: AxisScale,
    /// Shown ranges; None sets them from the series (points, error bars, lines; not the
    /// guides) with a margin of 4% of the span (of the log10 span on logarithmic axes).
    pub x_range: Option<(f64, f64)>,
    pub y_range: Option<(f64, f64)>,
    pub series: Vec<Series>,
    pub guides: Vec<Guide>,
    /// Text lines written in a corner, e.g. fitted slopes.
    pub notes: Vec<String>,
}

/// One tick mark of an axis.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotTick {
    pub value: f64,
    /// Figure position in output pixels: x for the x axis, y (downwards) for the y axis.
    pub position: f64,
    /// Major ticks are longer; only they can carry a label.
    pub major: bool,
    /// Text under (x) or beside (y) the tick, with markup; None for unlabelled ticks.
    pub label: Option<String>,
}

/// Where the frame and the ticks of a plot lie, in output pixels (origin top left).
#[derive(Debug, Clone, PartialEq)]
pub struct PlotAxes {
    pub width: u32,
    pub height: u32,
    /// The frame: left, top, width, height.
    pub frame: (f64, f64, f64, f64),
    pub x_range: (f64, f64),
    pub y_range: (f64, f64),
    pub x_ticks: Vec<PlotTick>,
    pub y_ticks: Vec<PlotTick>,
}

/// Draws the plot as PNG bytes (RGB, resolution recorded), `width_px` wide; the height
/// follows from the frame's 4:3 shape and the margins. Text is 9 pt at `dpi`.
pub fn plot_png(p: &Plot, width_px: u32, dpi: f64) -> Result<Vec<u8>, RenderError> {
    build(p, width_px, dpi)?.flat_scene().to_png()
}

/// Draws the plot as a one-page PDF (see [`plot_png`]).
pub fn plot_pdf(p: &Plot, width_px: u32, dpi: f64) -> Result<Vec<u8>, RenderError> {
    build(p, width_px, dpi)?.flat_scene().to_pdf()
}

/// Draws the plot as SVG text (see [`plot_png`]).
pub fn plot_svg(p: &Plot, width_px: u32, dpi: f64) -> Result<String, RenderError> {
    Ok(build(p, width_px, dpi)?.to_svg())
}

/// The frame, ranges and ticks the plot is drawn with.
pub fn plot_axes(p: &Plot, width_px: u32, dpi: f64) -> Result<PlotAxes, RenderError> {
    Ok(layout(p, width_px, dpi)?.axes)
}

/// Ticks for values `lo`..`hi` on an axis of the given scale drawn from figure position
/// `start` (at `lo`) to `end` (at `hi`), with at most about `max_labels` labelled ticks.
///
/// Linear axes step by 1, 2 or 5 times a power of ten, with minor ticks between. Logarithmic
/// axes put major ticks at decades (every second or more when there are many), minor ticks at
/// 2..9 times them; when fewer than two decades are shown, 2 and 5 times a decade are labelled
/// too, and when even that gives fewer than two labels the labelled ticks follow linear
/// steps. Decades are written 0.01, 0.1, 1, 10, 100, 1000 when all labels fit that form,
/// as 10^{n} otherwise.
pub fn scale_ticks(
    scale: AxisScale,
    lo: f64,
    hi: f64,
    start: f64,
    end: f64,
    max_labels: usize,
) -> Vec<PlotTick> {
    if !(lo.is_finite() && hi.is_finite() && hi > lo) {
        return Vec::new();
    }
    let vals = match scale {
        AxisScale::Linear => linear_tick_values(lo, hi, max_labels),
        AxisScale::Log10 if lo > 0.0 => log_tick_values(lo, hi, max_labels),
        AxisScale::Log10 => Vec::new(),
    };
    let map = AxisMap::new(scale, lo, hi, start, end);
    vals.into_iter()
        .filter_map(|(value, major, label)| {
            map.pos(value).map(|position| PlotTick {
                value,
                position,
                major,
                label,
            })
        })
        .collect()
}

/// A value as `n / 10^-e` or `n * 10^e`, so round values stay as round as f64 allows.
fn scaled(n: i64, e: i32) -> f64 {
    if e >= 0 {
        n as f64 * 10f64.powi(e)
    } else {
        n as f64 / 10f64.powi(-e)
    }
}

/// A number in fixed notation with `decimals` places and a true minus sign.
fn fixed(v: f64, decimals: usize) -> String {
    let s = format!("{:.*}", decimals, v);
    let s = if s
        .trim_start_matches('-')
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        s.trim_start_matches('-').to_string()
    } else {
        s
    };
    s.replace('-', "\u{2212}")
}

type TickValue = (f64, bool, Option<String>);

fn linear_tick_values(lo: f64, hi: f64, max_labels: usize) -> Vec<TickValue> {
    let n = max_labels.max(2) as f64;
    let span = hi - lo;
    let mut e = (span / n).log10().floor() as i32 - 1;
    let mut m = 1i64;
    // The smallest 1-2-5 step giving at most `n` labelled ticks.
    'search: for _ in 0..8 {
        for mm in [1i64, 2, 5] {
            let step = scaled(mm, e);
            let count = ((hi / step + 1e-9).floor() - (lo / step - 1e-9).ceil()) + 1.0;
            if count <= n {
                m = mm;
                break 'search;
            }
        }
        e += 1;
    }
    let step = scaled(m, e);
    let big = lo.abs().max(hi.abs());
    let sci = !(1e-3..1e5).contains(&big);
    let decimals = if e < 0 { (-e) as usize } else { 0 };
    let minor_div = if m == 2 { 4 } else { 5 };
    let k0 = (lo / step - 1e-9).ceil() as i64 - 1;
    let k1 = (hi / step + 1e-9).floor() as i64 + 1;
    let mut out = Vec::new();
    for k in k0..=k1 {
        for j in 0..minor_div {
            // Value (k * minor_div + j) * step / minor_div, kept as an integer times 10^e'.
            let (num_, e2) = if minor_div == 5 {
                ((k * minor_div + j) * m * 2, e - 1)
            } else {
                ((k * minor_div + j) * 5, e - 1)
            };
            let v = scaled(num_, e2);
            if v < lo - 1e-9 * span || v > hi + 1e-9 * span {
                continue;
            }
            if j == 0 {
                let label = if sci {
                    sci_label(k * m, e)
                } else {
                    fixed(v, decimals)
                };
                out.push((v, true, Some(label)));
            } else {
                out.push((v, false, None));
            }
        }
    }
    out
}

fn log_tick_values(lo: f64, hi: f64, max_labels: usize) -> Vec<TickValue> {
    let l0 = lo.log10();
    let l1 = hi.log10();
    let e_lo = (l0 - 1e-9).floor() as i32;
    let e_hi = (l1 + 1e-9).floor() as i32;
    let inside = |v: f64| v >= lo * (1.0 - 1e-9) && v <= hi * (1.0 + 1e-9);
    let decades: Vec<i32> = (e_lo..=e_hi).filter(|&e| inside(scaled(1, e))).collect();
    let nd = decades.len();
    let max_labels = max_labels.max(2);
    let compact = |e: i32| (-2..=3).contains(&e);
    if nd >= 2 {
        let every = nd.div_ceil(max_labels + max_labels / 2).max(1) as i32;
        let all_compact = decades.iter().all(|&e| compact(e));
        let mut out = Vec::new();
        for e in e_lo..=e_hi {
            let v = scaled(1, e);
            if inside(v) {
                let label = (e.rem_euclid(every) == 0).then(|| {
                    if all_compact {
                        fixed(v, (-e).max(0) as usize)
                    } else {
                        format!("10^{{{}}}", e.to_string().replace('-', "\u{2212}"))
                    }
                });
                out.push((v, true, label));
            }
            if every == 1 || nd <= 12 {
                for m in 2..=9 {
                    let v = scaled(m, e);
                    if inside(v) {
                        out.push((v, false, None));
                    }
                }
            }
        }
        return out;
    }
    // Less than two decades: label 1, 2 and 5 times a decade.
    let mut out = Vec::new();
    let all_compact = (e_lo..=e_hi).all(compact);
    let lab = |m: i64, e: i32| {
        if all_compact {
            fixed(scaled(m, e), (-e).max(0) as usize)
        } else {
            sci_label(m, e)
        }
    };
    for e in e_lo..=e_hi {
        for m in 1..=9 {
            let v = scaled(m, e);
            if inside(v) {
                let major = m == 1 || m == 2 || m == 5;
                out.push((v, major, major.then(|| lab(m, e))));
            }
        }
    }
    if out.iter().filter(|t| t.2.is_some()).count() >= 2 {
        return out;
    }
    // Even narrower: round linear steps placed on the logarithmic axis.
    linear_tick_values(lo, hi, max_labels.min(5))
        .into_iter()
        .filter(|t| t.0 > 0.0)
        .collect()
}

/// Maps values of one axis to figure positions.
#[derive(Debug, Clone, Copy)]
struct AxisMap {
    log: bool,
    t0: f64,
    t1: f64,
    start: f64,
    end: f64,
}

impl AxisMap {
    fn new(scale: AxisScale, lo: f64, hi: f64, start: f64, end: f64) -> Self {
        let log = scale == AxisScale::Log10;
        let t = |v: f64| if log { v.log10() } else { v };
        AxisMap {
            log,
            t0: t(lo),
            t1: t(hi),
            start,
            end,
        }
    }
    /// The transformed value (log10 on log axes); None when it cannot be shown.
    fn t(&self, v: f64) -> Option<f64> {
        if !v.is_finite() || (self.log && v <= 0.0) {
            None
        } else if self.log {
            Some(v.log10())
        } else {
            Some(v)
        }
    }
    fn at_t(&self, t: f64) -> f64 {
        self.start + (t - self.t0) / (self.t1 - self.t0) * (self.end - self.start)
    }
    fn pos(&self, v: f64) -> Option<f64> {
        self.t(v).map(|t| self.at_t(t))
    }
}

/// Output geometry shared by the drawing and [`plot_axes`].
struct Layout {
    axes: PlotAxes,
    xm: AxisMap,
    ym: AxisMap,
    pt: f64,
    fs: f64,
    lfs: f64,
    gap: f64,
    pad: f64,
}

fn check_range(r: (f64, f64), scale: AxisScale, which: &str) -> Result<(), RenderError> {
    let ok = r.0.is_finite() && r.1.is_finite() && r.1 > r.0;
    if !ok {
        return Err(RenderError::BadStyle(format!(
            "the {which} range {} to {} is not an increasing pair of finite numbers; give lower then upper",
            r.0, r.1
        )));
    }
    if scale == AxisScale::Log10 && r.0 <= 0.0 {
        return Err(RenderError::BadStyle(format!(
            "the {which} range starts at {}, but a logarithmic axis needs positive values; give a positive lower end",
            r.0
        )));
    }
    Ok(())
}

/// Every value the series put on one axis (x when `x`), for the automatic range: points that
/// can be shown on both axes with their error bars, the outer edges of step lines, and the
/// points of lines.
fn data_values(p: &Plot, x: bool) -> Vec<f64> {
    let ok = |v: f64, sc: AxisScale| v.is_finite() && (sc == AxisScale::Linear || v > 0.0);
    let shown = |q: &(f64, f64)| ok(q.0, p.x_scale) && ok(q.1, p.y_scale);
    let pick = |q: &(f64, f64)| if x { q.0 } else { q.1 };
    let mut v = Vec::new();
    for s in &p.series {
        let errs = if x { &s.x_errors } else { &s.y_errors };
        for (k, q) in s.points.iter().enumerate() {
            if !shown(q) {
                continue;
            }
            v.push(pick(q));
            if let Some(&(a, b)) = errs.as_ref().and_then(|e| e.get(k)) {
                v.extend([a, b]);
            }
        }
        if s.steps && x {
            let xm = AxisMap::new(p.x_scale, 1.0, 10.0, 0.0, 1.0);
            let mut ts: Vec<f64> = s
                .points
                .iter()
                .filter(|q| shown(q))
                .filter_map(|q| xm.t(q.0))
                .collect();
            ts.sort_by(f64::total_cmp);
            if let (Some(&a), Some(&b)) = (ts.first(), ts.last()) {
                let n = ts.len();
                let (h0, h1) = if n == 1 {
                    (0.5, 0.5)
                } else {
                    (0.5 * (ts[1] - ts[0]), 0.5 * (ts[n - 1] - ts[n - 2]))
                };
                let back = |t: f64| if xm.log { 10f64.powf(t) } else { t };
                v.extend([back(a - h0), back(b + h1)]);
            }
        }
        if let Some(l) = &s.line {
            v.extend(l.iter().filter(|q| shown(q)).map(pick));
        }
    }
    v
}

fn auto_range(vals: &[f64], scale: AxisScale) -> (f64, f64) {
    let log = scale == AxisScale::Log10;
    let ts: Vec<f64> = vals
        .iter()
        .filter(|v| v.is_finite() && (!log || **v > 0.0))
        .map(|&v| if log { v.log10() } else { v })
        .collect();
    let (mut a, mut b) = ts
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &t| {
            (a.min(t), b.max(t))
        });
    if ts.is_empty() {
        (a, b) = (0.0, 1.0);
    } else if b - a <= 1e-12 * a.abs().max(1.0) {
        let h = if log { 0.5 } else { (a.abs() * 0.1).max(0.5) };
        (a, b) = (a - h, b + h);
    } else {
        let m = 0.04 * (b - a);
        (a, b) = (a - m, b + m);
    }
    if log {
        (10f64.powf(a), 10f64.powf(b))
    } else {
        (a, b)
    }
}

fn layout(p: &Plot, width_px: u32, dpi: f64) -> Result<Layout, RenderError> {
    if !(dpi.is_finite() && (30.0..=2400.0).contains(&dpi)) {
        return Err(RenderError::BadStyle(format!(
            "dpi must be between 30 and 2400, got {dpi}"
        )));
    }
    for s in &p.series {
        for (what, e) in [("y", &s.y_errors), ("x", &s.x_errors)] {
            if let Some(e) = e
                && e.len() != s.points.len()
            {
                return Err(RenderError::BadStyle(format!(
                    "series \"{}\" has {} points but {} {what} error bars; give one per point",
                    text::plain(&s.label),
                    s.points.len(),
                    e.len()
                )));
            }
        }
    }
    let xr = match p.x_range {
        Some(r) => {
            check_range(r, p.x_scale, "x")?;
            r
        }
        None => auto_range(&data_values(p, true), p.x_scale),
    };
    let yr = match p.y_range {
        Some(r) => {
            check_range(r, p.y_scale, "y")?;
            r
        }
        None => auto_range(&data_values(p, false), p.y_scale),
    };
    let pt = dpi / 72.0;
    let fs = 9.0 * pt;
    let lfs = 0.9 * fs;
    let pad = 0.6 * fs;
    let gap = 0.45 * fs;
    let w = width_px as f64;
    let inches = w / dpi;
    // About one labelled tick per 0.6 inch of axis.
    let nx = ((inches * 0.8 / 0.55).floor() as usize).clamp(3, 10);
    let ny = ((inches * 0.6 / 0.33).floor() as usize).clamp(3, 8);
    // First pass for the label widths, then the real frame.
    let y_lab_w = scale_ticks(p.y_scale, yr.0, yr.1, 1.0, 0.0, ny)
        .iter()
        .filter_map(|t| t.label.as_ref().map(|l| text::width(l, lfs)))
        .fold(0.0, f64::max);
    let x_last_w = scale_ticks(p.x_scale, xr.0, xr.1, 0.0, 1.0, nx)
        .iter()
        .filter(|t| t.label.is_some() && t.position > 0.97)
        .filter_map(|t| t.label.as_ref().map(|l| text::width(l, lfs)))
        .fold(0.0, f64::max);
    let has_y_label = !p.y_label.is_empty();
    let left = (pad + if has_y_label { 1.45 * fs + gap } else { 0.0 } + y_lab_w + gap).round();
    let right = (pad + 0.5 * x_last_w).max(pad + 0.5 * fs).round();
    let top = (pad
        + if p.title.is_some() {
            1.6 * fs
        } else {
            0.4 * fs
        })
    .round();
    let bottom = (gap
        + 1.3 * lfs
        + if p.x_label.is_empty() {
            0.0
        } else {
            gap + 1.45 * fs
        }
        + pad)
        .round();
    let pw = w - left - right;
    if pw < 4.0 * fs {
        return Err(RenderError::BadStyle(format!(
            "a plot {width_px} pixels wide at {dpi} dpi leaves no room for the frame; make it wider or lower the dpi"
        )));
    }
    let ph = (0.75 * pw).round();
    let height = (top + ph + bottom).ceil() as u32;
    let frame = (left, top, pw, ph);
    let xm = AxisMap::new(p.x_scale, xr.0, xr.1, left, left + pw);
    let ym = AxisMap::new(p.y_scale, yr.0, yr.1, top + ph, top);
    let x_ticks = scale_ticks(p.x_scale, xr.0, xr.1, left, left + pw, nx);
    let y_ticks = scale_ticks(p.y_scale, yr.0, yr.1, top + ph, top, ny);
    Ok(Layout {
        axes: PlotAxes {
            width: width_px,
            height,
            frame,
            x_range: xr,
            y_range: yr,
            x_ticks,
            y_ticks,
        },
        xm,
        ym,
        pt,
        fs,
        lfs,
        gap,
        pad,
    })
}

/// One painted path of the figure.
struct Op {
    d: PathData,
    paints: Vec<Paint>,
    clip: bool,
    class: String,
    label: Option<String>,
    /// Text written along a line: `d` is in the text's own frame, turned onto the page by
    /// this (the SVG's `transform`).
    turn: Option<Turn>,
}

/// A named group of paths (one `<g>` in the SVG).
struct Group {
    id: String,
    class: String,
    label: Option<String>,
    ops: Vec<Op>,
}

struct Figure {
    width: u32,
    height: u32,
    dpi: f64,
    frame: (f64, f64, f64, f64),
    title: String,
    groups: Vec<Group>,
}

impl Group {
    fn new(id: &str, class: &str, label: Option<String>) -> Self {
        Group {
            id: id.to_string(),
            class: class.to_string(),
            label,
            ops: Vec::new(),
        }
    }
    fn path(&mut self, d: PathData, paints: Vec<Paint>, clip: bool, class: &str) {
        if d.0.is_empty() {
            return;
        }
        self.ops.push(Op {
            d,
            paints,
            clip,
            class: class.to_string(),
            label: None,
            turn: None,
        });
    }
    /// Text as outlines; alignment as in the scene's text (`ha` 0 left .. 1 right, `va` 0
    /// baseline .. 1 capital tops at y).
    #[allow(clippy::too_many_arguments)]
    fn text(
        &mut self,
        s: &str,
        x: f64,
        y: f64,
        size: f64,
        ha: f64,
        va: f64,
        rotate: bool,
        halo: Option<f64>,
    ) {
        if s.is_empty() {
            return;
        }
        let sh = text::shape(s, size);
        let d = sh
            .path
            .placed(-ha * sh.width, va * sh.ascent, false)
            .placed(x, y, rotate);
        self.push_text(s, d, halo, None);
    }

    /// Text at any angle: the box of its ink centred on the turn's place, its baseline turned
    /// by the turn's angle (counter-clockwise on the page).
    fn text_along(&mut self, s: &str, size: f64, turn: Turn, halo: Option<f64>) {
        if s.is_empty() {
            return;
        }
        let (l, t, r, b) = text::ink_bounds(s, size);
        let d = text::shape(s, size)
            .path
            .placed(-0.5 * (l + r), -0.5 * (t + b), false);
        self.push_text(s, d, halo, Some(turn));
    }

    fn push_text(&mut self, s: &str, d: PathData, halo: Option<f64>, turn: Option<Turn>) {
        let mut paints = Vec::new();
        if let Some(w) = halo {
            paints.push(Paint::Stroke(Line {
                color: Rgba(255, 255, 255, 255),
                width: w,
                dash: Vec::new(),
                round: true,
            }));
        }
        paints.push(Paint::Fill(Rgba::BLACK));
        self.ops.push(Op {
            d,
            paints,
            clip: false,
            class: "text".into(),
            label: Some(text::plain(s)),
            turn,
        });
    }
}

impl Figure {
    /// The plot as a flat scene (turned text as its turned outlines), for the PNG and the
    /// PDF.
    fn flat_scene(&self) -> Scene {
        let mut sc = Scene::new(self.width, self.height, self.dpi, &self.title);
        sc.clip = Some(self.frame);
        for g in &self.groups {
            for op in &g.ops {
                sc.items.push(Item::Path {
                    d: match op.turn {
                        Some(t) => op.d.turned(t),
                        None => op.d.clone(),
                    },
                    paints: op.paints.clone(),
                    clip: op.clip,
                    id: None,
                    class: op.class.clone(),
                    label: None,
                });
            }
        }
        sc
    }

    fn to_svg(&self) -> String {
        let mut s = String::new();
        let inch = |px: u32| num(px as f64 / self.dpi);
        let _ = writeln!(
            s,
            "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\" \
             version=\"1.1\" width=\"{}in\" height=\"{}in\" viewBox=\"0 0 {} {}\">",
            inch(self.width),
            inch(self.height),
            self.width,
            self.height
        );
        let _ = writeln!(s, "<title>{}</title>", xml_escape(&self.title));
        let (x, y, w, h) = self.frame;
        let _ = writeln!(
            s,
            "<defs><clipPath id=\"frame-clip\"><rect x=\"{}\" y=\"{}\" width=\"{}\" \
             height=\"{}\"/></clipPath></defs>",
            num(x),
            num(y),
            num(w),
            num(h)
        );
        let _ = writeln!(
            s,
            "<rect x=\"0\" y=\"0\" width=\"{}\" height=\"{}\" fill=\"#FFFFFF\"/>",
            self.width, self.height
        );
        for g in &self.groups {
            let label = g
                .label
                .as_ref()
                .map(|l| format!(" aria-label=\"{}\"", xml_escape(l)))
                .unwrap_or_default();
            let _ = writeln!(
                s,
                "<g id=\"{}\" class=\"{}\"{label}>",
                xml_escape(&g.id),
                xml_escape(&g.class)
            );
            for op in &g.ops {
                let d = path_string(&op.d);
                if d.is_empty() {
                    continue;
                }
                let clip = if op.clip {
                    " clip-path=\"url(#frame-clip)\""
                } else {
                    ""
                };
                let label = op
                    .label
                    .as_ref()
                    .map(|l| format!(" aria-label=\"{}\"", xml_escape(l)))
                    .unwrap_or_default();
                let turn = op
                    .turn
                    .map(|t| format!(" transform=\"{}\"", t.svg()))
                    .unwrap_or_default();
                // A fill with an edge is one element; any other painting (a halo under
                // text) is one element per paint, in order.
                let groups: Vec<Vec<&Paint>> = match op.paints.as_slice() {
                    [f @ Paint::Fill(_), st @ Paint::Stroke(_)] => vec![vec![f, st]],
                    ps => ps.iter().map(|p| vec![p]).collect(),
                };
                for ps in groups {
                    let _ = writeln!(
                        s,
                        "<path class=\"{}\"{label}{clip}{turn} {} d=\"{d}\"/>",
                        xml_escape(&op.class),
                        paint_attrs(&ps)
                    );
                }
            }
            s.push_str("</g>\n");
        }
        s.push_str("</svg>\n");
        s
    }
}

fn paint_attrs(ps: &[&Paint]) -> String {
    let mut a = String::new();
    let fill = ps.iter().find_map(|p| match p {
        Paint::Fill(c) => Some(*c),
        _ => None,
    });
    let stroke = ps.iter().find_map(|p| match p {
        Paint::Stroke(l) => Some(l),
        _ => None,
    });
    match fill {
        Some(c) => {
            let _ = write!(a, "fill=\"{}\"", c.hex());
            if c.3 != 255 {
                let _ = write!(a, " fill-opacity=\"{}\"", num(c.3 as f64 / 255.0));
            }
        }
        None => a.push_str("fill=\"none\""),
    }
    match stroke {
        Some(l) => {
            a.push(' ');
            a.push_str(&stroke_attrs(l));
        }
        None => a.push_str(" stroke=\"none\""),
    }
    a
}

/// Cuts the segment a-b to the rectangle (x0, y0, x1, y1); None when it misses it
/// (Liang-Barsky clipping).
pub(crate) fn clip_segment(
    a: (f64, f64),
    b: (f64, f64),
    r: (f64, f64, f64, f64),
) -> Option<((f64, f64), (f64, f64))> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    clip_params(a, b, r).map(|(t0, t1)| {
        (
            (a.0 + t0 * dx, a.1 + t0 * dy),
            (a.0 + t1 * dx, a.1 + t1 * dy),
        )
    })
}

/// The part of the segment a-b inside the rectangle (x0, y0, x1, y1) as the fractions of
/// the way from a to b where it enters and leaves; None when it misses it.
fn clip_params(a: (f64, f64), b: (f64, f64), r: (f64, f64, f64, f64)) -> Option<(f64, f64)> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let mut t0 = 0.0f64;
    let mut t1 = 1.0f64;
    for (p, q) in [
        (-dx, a.0 - r.0),
        (dx, r.2 - a.0),
        (-dy, a.1 - r.1),
        (dy, r.3 - a.1),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let t = q / p;
            if p < 0.0 {
                t0 = t0.max(t);
            } else {
                t1 = t1.min(t);
            }
        }
    }
    (t0 <= t1).then_some((t0, t1))
}

/// Darker version of a colour (for error bars, which are thin).
fn darker(c: Rgba, f: f64) -> Rgba {
    let k = |v: u8| (v as f64 * (1.0 - f)).round() as u8;
    Rgba(k(c.0), k(c.1), k(c.2), c.3)
}

/// Name of the marker shape of style `i`.
pub fn marker_shape(i: usize) -> &'static str {
    [
        "circle",
        "square",
        "triangle",
        "diamond",
        "inverted-triangle",
        "pentagon",
        "cross",
    ][i % 7]
}

/// Adds the marker of style `i` with radius `r` centred at (x, y) to `d`.
fn marker(d: &mut PathData, i: usize, x: f64, y: f64, r: f64) {
    let poly = |d: &mut PathData, pts: &[(f64, f64)]| {
        for (j, &(u, v)) in pts.iter().enumerate() {
            if j == 0 {
                d.move_to(x + u * r, y + v * r);
            } else {
                d.line_to(x + u * r, y + v * r);
            }
        }
        d.close();
    };
    match i % 7 {
        0 => {
            let k = 0.552_284_75 * r;
            d.move_to(x + r, y);
            d.0.push(Seg::C(x + r, y + k, x + k, y + r, x, y + r));
            d.0.push(Seg::C(x - k, y + r, x - r, y + k, x - r, y));
            d.0.push(Seg::C(x - r, y - k, x - k, y - r, x, y - r));
            d.0.push(Seg::C(x + k, y - r, x + r, y - k, x + r, y));
            d.close();
        }
        1 => poly(
            d,
            &[(-0.85, -0.85), (0.85, -0.85), (0.85, 0.85), (-0.85, 0.85)],
        ),
        2 => poly(d, &[(0.0, -1.25), (1.1, 0.65), (-1.1, 0.65)]),
        3 => poly(d, &[(0.0, -1.2), (1.0, 0.0), (0.0, 1.2), (-1.0, 0.0)]),
        4 => poly(d, &[(0.0, 1.25), (-1.1, -0.65), (1.1, -0.65)]),
        5 => {
            let pts: Vec<(f64, f64)> = (0..5)
                .map(|j| {
                    let a = std::f64::consts::TAU * j as f64 / 5.0;
                    (1.08 * a.sin(), -1.08 * a.cos())
                })
                .collect();
            poly(d, &pts)
        }
        _ => {
            let (a, b) = (0.38, 1.15);
            poly(
                d,
                &[
                    (-a, -b),
                    (a, -b),
                    (a, -a),
                    (b, -a),
                    (b, a),
                    (a, a),
                    (a, b),
                    (-a, b),
                    (-a, a),
                    (-b, a),
                    (-b, -a),
                    (-a, -a),
                ],
            )
        }
    }
}

/// Pixel polylines of data points: broken where a point cannot be shown, cut to `r`.
fn polyline(
    pts: &[(f64, f64)],
    xm: &AxisMap,
    ym: &AxisMap,
    r: (f64, f64, f64, f64),
) -> Vec<Vec<(f64, f64)>> {
    let px: Vec<Option<(f64, f64)>> = pts
        .iter()
        .map(|&(x, y)| Some((xm.pos(x)?, ym.pos(y)?)))
        .collect();
    pixel_runs(&px, r)
}

fn pixel_runs(px: &[Option<(f64, f64)>], r: (f64, f64, f64, f64)) -> Vec<Vec<(f64, f64)>> {
    let mut runs: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    for w in px.windows(2) {
        match (w[0], w[1]) {
            (Some(a), Some(b)) => match clip_segment(a, b, r) {
                Some((c, d)) => {
                    if cur.last() != Some(&c) {
                        if !cur.is_empty() {
                            runs.push(std::mem::take(&mut cur));
                        }
                        cur.push(c);
                    }
                    cur.push(d);
                }
                None => {
                    if !cur.is_empty() {
                        runs.push(std::mem::take(&mut cur));
                    }
                }
            },
            _ => {
                if !cur.is_empty() {
                    runs.push(std::mem::take(&mut cur));
                }
            }
        }
    }
    if !cur.is_empty() {
        runs.push(cur);
    }
    runs
}

fn runs_path(runs: &[Vec<(f64, f64)>]) -> PathData {
    let mut d = PathData::new();
    for run in runs {
        for (j, &(x, y)) in run.iter().enumerate() {
            if j == 0 {
                d.move_to(x, y);
            } else {
                d.line_to(x, y);
            }
        }
    }
    d
}

/// The step outline of a binned series in pixels: horizontal at each value across its bin,
/// vertical between neighbouring bins; broken at values that cannot be shown.
fn step_pixels(pts: &[(f64, f64)], xm: &AxisMap, ym: &AxisMap) -> Vec<Option<(f64, f64)>> {
    let mut c: Vec<(f64, f64)> = pts
        .iter()
        .filter_map(|&(x, y)| Some((xm.t(x)?, y)))
        .collect();
    c.sort_by(|a, b| a.0.total_cmp(&b.0));
    let n = c.len();
    let mut out = Vec::new();
    if n == 0 {
        return out;
    }
    let half = |i: usize| -> f64 {
        if n == 1 {
            0.5
        } else if i + 1 < n {
            0.5 * (c[i + 1].0 - c[i].0)
        } else {
            0.5 * (c[i].0 - c[i - 1].0)
        }
    };
    let mut prev_ok = false;
    for i in 0..n {
        let left = if i == 0 {
            c[0].0 - half(0)
        } else {
            0.5 * (c[i - 1].0 + c[i].0)
        };
        let right = if i + 1 == n {
            c[i].0 + half(i)
        } else {
            0.5 * (c[i].0 + c[i + 1].0)
        };
        match ym.pos(c[i].1) {
            Some(y) => {
                out.push(Some((xm.at_t(left), y)));
                out.push(Some((xm.at_t(right), y)));
                prev_ok = true;
            }
            None => {
                if prev_ok {
                    out.push(None);
                }
                prev_ok = false;
            }
        }
    }
    out
}

/// Points spaced about `step` pixels along the runs (for judging how full a corner is).
fn sample_runs(runs: &[Vec<(f64, f64)>], step: f64, out: &mut Vec<(f64, f64)>) {
    for run in runs {
        for w in run.windows(2) {
            let (a, b) = (w[0], w[1]);
            let len = (b.0 - a.0).hypot(b.1 - a.1);
            let n = ((len / step).ceil() as usize).clamp(1, 10_000);
            for k in 0..=n {
                let t = k as f64 / n as f64;
                out.push((a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1)));
            }
        }
    }
}

/// A rectangle: left, top, width, height.
type Rect = (f64, f64, f64, f64);

/// A point on a guide and whether the guide rises to the right there.
type Place = (f64, f64, bool);

/// A box of legend or notes in one of the frame's inner corners: (x, y, w, h).
fn corner_box(
    frame: (f64, f64, f64, f64),
    corner: usize,
    w: f64,
    h: f64,
    inset: f64,
) -> (f64, f64, f64, f64) {
    let (fx, fy, fw, fh) = frame;
    let x = if corner.is_multiple_of(2) {
        fx + fw - inset - w
    } else {
        fx + inset
    };
    let y = if corner < 2 {
        fy + inset
    } else {
        fy + fh - inset - h
    };
    (x, y, w, h)
}

/// `text` broken at spaces into lines no wider than `room` at size `fs` (a piece wider than
/// that stands alone on its line), never after a number, `=` or `±`, so that a value keeps its
/// unit and its uncertainty; continuation lines are indented by two spaces.
fn wrap_words(text_: &str, room: f64, fs: f64) -> Vec<String> {
    // Pieces that may not be broken: `=` and `±` join the word before them, and a word ending
    // in a digit, `=` or `±` takes the next word with it.
    let joins = |c: char| c.is_ascii_digit() || c == '=' || c == '\u{b1}';
    let mut pieces: Vec<String> = Vec::new();
    for word in text_.split(' ').filter(|w| !w.is_empty()) {
        match pieces.last_mut() {
            Some(last) if last.ends_with(joins) || word == "=" || word == "\u{b1}" => {
                last.push(' ');
                last.push_str(word);
            }
            _ => pieces.push(word.to_string()),
        }
    }
    let mut lines: Vec<String> = Vec::new();
    let mut line = String::new();
    for piece in pieces {
        let tried = if line.is_empty() {
            piece.clone()
        } else {
            format!("{line} {piece}")
        };
        if line.is_empty() || text::width(&tried, fs) <= room {
            line = tried;
        } else {
            lines.push(std::mem::take(&mut line));
            line = format!("  {piece}");
        }
    }
    if !line.is_empty() || lines.is_empty() {
        lines.push(line);
    }
    lines
}

/// The box of least score, the first of equal ones.
fn least(boxes: Vec<(Rect, f64)>) -> Option<Rect> {
    boxes
        .into_iter()
        .fold(None, |acc: Option<(Rect, f64)>, c| match acc {
            Some(a) if a.1 <= c.1 => Some(a),
            _ => Some(c),
        })
        .map(|(b, _)| b)
}

fn rects_overlap(a: Rect, b: Rect) -> bool {
    a.0 < b.0 + b.2 && b.0 < a.0 + a.2 && a.1 < b.1 + b.3 && b.1 < a.1 + a.3
}

/// A box turned on the page (a label written along a line, or a level one): its centre,
/// the unit vector along its length (the reading direction) and its half length and half
/// height. In its own frame, u runs along the length and v across it (downwards on the page
/// for a level box), both from the centre.
#[derive(Debug, Clone, Copy, PartialEq)]
struct TurnedBox {
    c: (f64, f64),
    u: (f64, f64),
    hw: f64,
    hh: f64,
}

impl TurnedBox {
    fn level(r: Rect) -> Self {
        TurnedBox {
            c: (r.0 + 0.5 * r.2, r.1 + 0.5 * r.3),
            u: (1.0, 0.0),
            hw: 0.5 * r.2,
            hh: 0.5 * r.3,
        }
    }
    fn grown(self, m: f64) -> Self {
        TurnedBox {
            hw: self.hw + m,
            hh: self.hh + m,
            ..self
        }
    }
    /// A point of the page in the box's own frame (u, v).
    fn own(&self, p: (f64, f64)) -> (f64, f64) {
        let (dx, dy) = (p.0 - self.c.0, p.1 - self.c.1);
        (dx * self.u.0 + dy * self.u.1, dy * self.u.0 - dx * self.u.1)
    }
    /// A point of the box's own frame on the page.
    fn page(&self, (a, b): (f64, f64)) -> (f64, f64) {
        (
            self.c.0 + a * self.u.0 - b * self.u.1,
            self.c.1 + a * self.u.1 + b * self.u.0,
        )
    }
    /// The box in its own frame: left, top, width, height.
    fn own_rect(&self) -> Rect {
        (-self.hw, -self.hh, 2.0 * self.hw, 2.0 * self.hh)
    }
    fn corners(&self) -> [(f64, f64); 4] {
        [(-1.0, -1.0), (1.0, -1.0), (1.0, 1.0), (-1.0, 1.0)]
            .map(|(a, b)| self.page((a * self.hw, b * self.hh)))
    }
    /// Whether a point lies in the box grown by `margin`.
    fn holds(&self, p: (f64, f64), margin: f64) -> bool {
        let (a, b) = self.own(p);
        a.abs() <= self.hw + margin && b.abs() <= self.hh + margin
    }
    /// The angle of the reading direction, counter-clockwise on the page, in degrees.
    fn degrees(&self) -> f64 {
        libm::atan2(-self.u.1, self.u.0).to_degrees()
    }
}

/// Whether two turned boxes overlap: no side of either separates them (the separating axis
/// theorem for convex shapes).
fn overlaps(a: TurnedBox, b: TurnedBox) -> bool {
    let d = (b.c.0 - a.c.0, b.c.1 - a.c.1);
    let reach = |x: &TurnedBox, n: (f64, f64)| {
        x.hw * (x.u.0 * n.0 + x.u.1 * n.1).abs() + x.hh * (x.u.0 * n.1 - x.u.1 * n.0).abs()
    };
    [a.u, (-a.u.1, a.u.0), b.u, (-b.u.1, b.u.0)]
        .into_iter()
        .all(|n| (d.0 * n.0 + d.1 * n.1).abs() < reach(&a, n) + reach(&b, n))
}

/// The distance from the segment a-b to the box (zero where they meet).
fn segment_box_distance(a: (f64, f64), b: (f64, f64), r: Rect) -> f64 {
    let (x0, y0, x1, y1) = (r.0, r.1, r.0 + r.2, r.1 + r.3);
    if clip_segment(a, b, (x0, y0, x1, y1)).is_some() {
        return 0.0;
    }
    // Apart: the nearest pair has an end of the segment or a corner of the box.
    let point_box = |(x, y): (f64, f64)| {
        (x0 - x)
            .max(x - x1)
            .max(0.0)
            .hypot((y0 - y).max(y - y1).max(0.0))
    };
    let point_segment = |(x, y): (f64, f64)| {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let len2 = dx * dx + dy * dy;
        let t = if len2 > 0.0 {
            (((x - a.0) * dx + (y - a.1) * dy) / len2).clamp(0.0, 1.0)
        } else {
            0.0
        };
        (a.0 + t * dx - x).hypot(a.1 + t * dy - y)
    };
    [point_box(a), point_box(b)]
        .into_iter()
        .chain([(x0, y0), (x1, y0), (x0, y1), (x1, y1)].map(point_segment))
        .fold(f64::INFINITY, f64::min)
}

/// The parts of drawn runs of a line outside a box (tested in the box's own frame, so a
/// turned box cuts the line along its own sides).
fn runs_outside(runs: &[Vec<(f64, f64)>], b: &TurnedBox) -> Vec<Vec<(f64, f64)>> {
    let r = b.own_rect();
    let r = (r.0, r.1, r.0 + r.2, r.1 + r.3);
    let mut out: Vec<Vec<(f64, f64)>> = Vec::new();
    for run in runs {
        let mut cur: Vec<(f64, f64)> = Vec::new();
        for w in run.windows(2) {
            let (a, c) = (w[0], w[1]);
            match clip_params(b.own(a), b.own(c), r) {
                None => {
                    if cur.is_empty() {
                        cur.push(a);
                    }
                    cur.push(c);
                }
                Some((t0, t1)) => {
                    let at = |t: f64| (a.0 + t * (c.0 - a.0), a.1 + t * (c.1 - a.1));
                    // Before the box, then after it.
                    if t0 > 0.0 {
                        if cur.is_empty() {
                            cur.push(a);
                        }
                        cur.push(at(t0));
                    }
                    if cur.len() > 1 {
                        out.push(std::mem::take(&mut cur));
                    }
                    cur.clear();
                    if t1 < 1.0 {
                        cur.push(at(t1));
                        cur.push(c);
                    }
                }
            }
        }
        if cur.len() > 1 {
            out.push(cur);
        }
    }
    out
}

/// The distance from drawn runs of a line to a box (in the box's own frame, which keeps
/// distances).
fn runs_distance(runs: &[Vec<(f64, f64)>], b: &TurnedBox) -> f64 {
    let r = b.own_rect();
    runs.iter()
        .flat_map(|run| run.windows(2))
        .map(|w| segment_box_distance(b.own(w[0]), b.own(w[1]), r))
        .fold(f64::INFINITY, f64::min)
}

/// How much drawn data a box covers: weighted samples inside it (grown by `margin`).
fn cover(b: &TurnedBox, samples: &[((f64, f64), f64)], margin: f64) -> f64 {
    samples
        .iter()
        .filter(|(q, _)| b.holds(*q, margin))
        .map(|(_, w)| w)
        .sum()
}

/// A place for a label written along a line: its centre on the line, the unit vector along
/// the line there (reading left to right, or upwards on a vertical line), and how far the
/// line bows away from that direction at the label's ends.
type AlongPlace = ((f64, f64), (f64, f64), f64);

/// Places along drawn runs of a line for a label `2 hw` long written on it, every `step`
/// pixels of the line from its end backwards, the last run first, each leaving at least
/// `lead` pixels of the run beyond both ends of the label (so the line shows on both sides).
/// The direction is that of the chord between the line's points `hw` before and after the
/// centre, so it follows the line as drawn on the page; runs too short hold none.
fn along_places(runs: &[Vec<(f64, f64)>], hw: f64, lead: f64, step: f64) -> Vec<AlongPlace> {
    let mut out = Vec::new();
    for run in runs.iter().rev() {
        let mut cum = vec![0.0];
        for w in run.windows(2) {
            let last = cum[cum.len() - 1];
            cum.push(last + (w[1].0 - w[0].0).hypot(w[1].1 - w[0].1));
        }
        let total = cum[cum.len() - 1];
        if run.len() < 2 || total < 2.0 * (hw + lead) || step <= 0.0 {
            continue;
        }
        // The point `s` pixels along the run.
        let at = |s: f64| {
            let j = cum.partition_point(|&c| c <= s).clamp(1, run.len() - 1);
            let (a, b) = (run[j - 1], run[j]);
            let len = cum[j] - cum[j - 1];
            let t = if len > 0.0 {
                ((s - cum[j - 1]) / len).clamp(0.0, 1.0)
            } else {
                0.0
            };
            (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1))
        };
        let mut s = total - hw - lead;
        while s >= hw + lead {
            let (p, a, b) = (at(s), at(s - hw), at(s + hw));
            let (dx, dy) = (b.0 - a.0, b.1 - a.1);
            let len = dx.hypot(dy);
            if len > 0.0 {
                let flip = dx < -1e-9 * len || (dx.abs() <= 1e-9 * len && dy > 0.0);
                let k = if flip { -1.0 } else { 1.0 };
                let u = (k * (dx / len), k * (dy / len));
                // The centre's distance from the chord, the bow at the label's ends.
                let bow = ((p.0 - a.0) * u.1 - (p.1 - a.1) * u.0).abs();
                out.push((p, u, bow));
            }
            s -= step;
        }
    }
    out
}

fn build(p: &Plot, width_px: u32, dpi: f64) -> Result<Figure, RenderError> {
    let lay = layout(p, width_px, dpi)?;
    let (pt, fs, lfs, gap, pad) = (lay.pt, lay.fs, lay.lfs, lay.gap, lay.pad);
    let ax = &lay.axes;
    let (fx, fy, fw, fh) = ax.frame;
    let (xm, ym) = (&lay.xm, &lay.ym);
    let title = p.title.as_ref().map(|t| text::plain(t)).unwrap_or_else(|| {
        format!(
            "{} against {}",
            text::plain(&p.y_label),
            text::plain(&p.x_label)
        )
    });
    let mut groups = Vec::new();
    // Lines may run a little past the frame so caps and joins are cut by the clip, not short.
    let grow = 4.0 * pt;
    let cut = (fx - grow, fy - grow, fx + fw + grow, fy + fh + grow);
    let inside =
        |x: f64, y: f64, m: f64| x >= fx - m && x <= fx + fw + m && y >= fy - m && y <= fy + fh + m;
    // Weighted samples of everything drawn in the frame, for placing the legend and notes.
    let mut samples: Vec<((f64, f64), f64)> = Vec::new();
    // The error bars as drawn, for the guide labels to stay off them where they can.
    let mut bars: Vec<Vec<(f64, f64)>> = Vec::new();

    // Guides, under the data.
    let mut gg = Group::new("guides", "guides", None);
    let grey = Rgba(150, 150, 150, 255);
    let mut guide_labels: Vec<(String, Vec<Place>)> = Vec::new();
    let mut guide_runs: Vec<Vec<Vec<(f64, f64)>>> = Vec::new();
    for g in &p.guides {
        let runs = polyline(&g.points, xm, ym, cut);
        let mut sm = Vec::new();
        sample_runs(&runs, 0.3 * fs, &mut sm);
        samples.extend(sm.iter().map(|&q| (q, 0.3)));
        // Drawn once the labels are placed: a label written on its line cuts it.
        guide_runs.push(runs);
        // Places for the label: samples along the guide inside the frame, last first, with
        // the local direction (rising to the right on the page or not).
        let mut cands = Vec::new();
        for j in (1..sm.len()).rev() {
            let ((x0, y0), (x1, y1)) = (sm[j - 1], sm[j]);
            if inside(x1, y1, -0.5 * pt) && (x1 - x0).abs() + (y1 - y0).abs() > 0.0 {
                let rising = (y1 - y0) * (x1 - x0).signum() < 0.0;
                cands.push((x1, y1, rising));
            }
        }
        guide_labels.push((g.label.clone(), cands));
    }

    // Series.
    let mut series_groups = Vec::new();
    let mut legend: Vec<(usize, bool, bool)> = Vec::new();
    let r = 2.1 * pt;
    let lw = 1.0 * pt;
    for (si, s) in p.series.iter().enumerate() {
        let colour = state_colour(s.style);
        let dash = state_dash(s.style, lw);
        let mut g = Group::new(
            &format!("series-{si}"),
            &format!("series style-{}", s.style),
            (!s.label.is_empty()).then(|| text::plain(&s.label)),
        );
        let mut drew_line = false;
        let mut drew_markers = false;
        // Fitted line.
        if let Some(l) = &s.line {
            let runs = polyline(l, xm, ym, cut);
            let mut sm = Vec::new();
            sample_runs(&runs, 0.3 * fs, &mut sm);
            samples.extend(sm.iter().map(|&q| (q, 1.0)));
            if !runs.is_empty() {
                drew_line = true;
            }
            g.path(
                runs_path(&runs),
                vec![Paint::Stroke(Line {
                    color: colour,
                    width: lw,
                    dash: dash.clone(),
                    round: true,
                })],
                true,
                "fit",
            );
        }
        // Error bars.
        let eb_colour = darker(colour, 0.3);
        let cap = 0.8 * r;
        let mut eb = PathData::new();
        let (y_lo_px, y_hi_px) = (fy + fh + grow, fy - grow);
        let (x_lo_px, x_hi_px) = (fx - grow, fx + fw + grow);
        for (k, &(x, y)) in s.points.iter().enumerate() {
            let (Some(px), Some(py)) = (xm.pos(x), ym.pos(y)) else {
                continue;
            };
            if let Some(ye) = &s.y_errors {
                let (lo, hi) = ye[k];
                if lo.is_finite() && hi.is_finite() && inside(px, py, f64::INFINITY) {
                    // An end that cannot be shown (below zero on a log axis) runs off the
                    // frame, without a cap.
                    let a = ym.pos(lo);
                    let b = ym.pos(hi);
                    let ya = a.unwrap_or(y_lo_px).clamp(y_hi_px, y_lo_px);
                    let yb = b.unwrap_or(y_lo_px).clamp(y_hi_px, y_lo_px);
                    if px >= x_lo_px && px <= x_hi_px && (ya - yb).abs() > 0.0 {
                        eb.move_to(px, ya);
                        eb.line_to(px, yb);
                        for (end, shown) in [(ya, a.is_some()), (yb, b.is_some())] {
                            if shown && end < y_lo_px && end > y_hi_px {
                                eb.move_to(px - cap, end);
                                eb.line_to(px + cap, end);
                            }
                        }
                        samples.push(((px, ya), 0.5));
                        bars.push(vec![(px, ya), (px, yb)]);
                        samples.push(((px, yb), 0.5));
                    }
                }
            }
            if let Some(xe) = &s.x_errors {
                let (lo, hi) = xe[k];
                if lo.is_finite() && hi.is_finite() {
                    let a = xm.pos(lo);
                    let b = xm.pos(hi);
                    let xa = a.unwrap_or(x_lo_px).clamp(x_lo_px, x_hi_px);
                    let xb = b.unwrap_or(x_lo_px).clamp(x_lo_px, x_hi_px);
                    if py >= y_hi_px && py <= y_lo_px && (xa - xb).abs() > 0.0 {
                        eb.move_to(xa, py);
                        eb.line_to(xb, py);
                        for (end, shown) in [(xa, a.is_some()), (xb, b.is_some())] {
                            if shown && end > x_lo_px && end < x_hi_px {
                                eb.move_to(end, py - cap);
                                eb.line_to(end, py + cap);
                            }
                        }
                        samples.push(((xa, py), 0.5));
                        bars.push(vec![(xa, py), (xb, py)]);
                        samples.push(((xb, py), 0.5));
                    }
                }
            }
        }
        g.path(
            eb,
            vec![Paint::Stroke(Line::solid(eb_colour, 0.6 * pt))],
            true,
            "error-bars",
        );
        if s.steps {
            let px = step_pixels(&s.points, xm, ym);
            let runs = pixel_runs(&px, cut);
            let mut sm = Vec::new();
            sample_runs(&runs, 0.3 * fs, &mut sm);
            samples.extend(sm.iter().map(|&q| (q, 1.0)));
            if !runs.is_empty() {
                drew_line = true;
            }
            g.path(
                runs_path(&runs),
                vec![Paint::Stroke(Line {
                    color: colour,
                    width: lw,
                    dash: dash.clone(),
                    round: true,
                })],
                true,
                "steps",
            );
        } else {
            let mut d = PathData::new();
            for &(x, y) in &s.points {
                if let (Some(px), Some(py)) = (xm.pos(x), ym.pos(y))
                    && inside(px, py, 1.5 * r)
                {
                    marker(&mut d, s.style, px, py, r);
                    samples.push(((px, py), 2.0));
                    drew_markers = true;
                }
            }
            let (fill, edge) = if s.faded {
                (Rgba(colour.0, colour.1, colour.2, 70), Rgba(0, 0, 0, 70))
            } else {
                (colour, Rgba(0, 0, 0, 220))
            };
            g.path(
                d,
                vec![
                    Paint::Fill(fill),
                    Paint::Stroke(Line::solid(edge, 0.45 * pt)),
                ],
                true,
                &format!(
                    "markers {}{}",
                    marker_shape(s.style),
                    if s.faded { " faded" } else { "" }
                ),
            );
        }
        if !s.label.is_empty() && (drew_line || drew_markers) {
            legend.push((si, drew_line, drew_markers));
        }
        series_groups.push(g);
    }

    // Legend and notes boxes in the emptiest corners.
    let sample_w = 2.4 * fs;
    let row_h = 1.4 * lfs;
    let inner = 0.5 * fs;
    let inset = 0.5 * fs;
    let legend_w = legend
        .iter()
        .map(|&(si, _, _)| text::width(&p.series[si].label, lfs))
        .fold(0.0, f64::max)
        + sample_w
        + gap
        + 2.0 * inner;
    let legend_h = legend.len() as f64 * row_h + 2.0 * inner - 0.4 * lfs;
    let notes_w = p
        .notes
        .iter()
        .map(|n| text::width(n, lfs))
        .fold(0.0, f64::max)
        + 2.0 * inner;
    let notes_h = p.notes.len() as f64 * row_h + 2.0 * inner - 0.4 * lfs;
    // Corners in order of preference: top right, top left, bottom right, bottom left.
    let score = |b: Rect| {
        let tb = TurnedBox::level(b);
        let mut score = cover(&tb, &samples, r);
        for (_, cands) in &guide_labels {
            if let Some(&(x, y, _)) = cands.first()
                && cover(&tb, &[((x, y), 1.0)], 2.0 * fs) > 0.0
            {
                score += 0.5;
            }
        }
        score
    };
    let boxes = |w: f64, h: f64| -> Vec<(Rect, f64)> {
        (0..4)
            .map(|c| {
                let b = corner_box(ax.frame, c, w, h, inset);
                (b, score(b))
            })
            .collect()
    };
    // The legend and the notes placed together, so that together they cover the fewest data
    // (a legend in the emptiest corner could push wide notes onto the data), never on each
    // other; of equal choices the first in the order of preference, the legend's first.
    let (legend_box, notes_box) = match (legend.is_empty(), p.notes.is_empty()) {
        (true, true) => (None, None),
        (false, true) => (least(boxes(legend_w, legend_h)), None),
        (true, false) => (None, least(boxes(notes_w, notes_h))),
        (false, false) => {
            let (lb, nb) = (boxes(legend_w, legend_h), boxes(notes_w, notes_h));
            let mut best: Option<(Rect, Rect, f64)> = None;
            let (fx, fy, fw, fh) = ax.frame;
            // The legend stacked on the notes' inner side in their corner, where it fits.
            let stacked = |c: usize, n: Rect| {
                let x = if c.is_multiple_of(2) {
                    n.0 + n.2 - legend_w
                } else {
                    n.0
                };
                let y = if c < 2 {
                    n.1 + n.3 + inset
                } else {
                    n.1 - inset - legend_h
                };
                let b = (x, y, legend_w, legend_h);
                let inside =
                    x >= fx && y >= fy && x + legend_w <= fx + fw && y + legend_h <= fy + fh;
                inside.then(|| (b, score(b)))
            };
            // The legend's corners first (its preference ruling ties), then stacked.
            for l in lb.iter().map(Some).chain([None]) {
                for (c, &(n, ns)) in nb.iter().enumerate() {
                    let Some((lbox, ls)) = l.copied().or_else(|| stacked(c, n)) else {
                        continue;
                    };
                    let s = ls + ns + if rects_overlap(lbox, n) { 1e9 } else { 0.0 };
                    if best.is_none_or(|b| s < b.2) {
                        best = Some((lbox, n, s));
                    }
                }
            }
            let (l, n, _) = best.expect("four corners");
            (Some(l), Some(n))
        }
    };
    // A legend or notes that the frame has no room for, that cover data in the best of the
    // corners (a marker, a fitted line or two error-bar ends; a few samples of a guide are
    // allowed), or that meet each other, go under the plot instead: the legend's entries in
    // rows, then the notes, each wrapped to the figure's width; the figure grows to hold them.
    let (fx, fy, fw, fh) = ax.frame;
    let fits_clear = |b: Rect| {
        b.0 >= fx && b.1 >= fy && b.0 + b.2 <= fx + fw && b.1 + b.3 <= fy + fh && score(b) < 1.0
    };
    let apart = match (legend_box, notes_box) {
        (Some(l), Some(n)) => !rects_overlap(l, n),
        _ => true,
    };
    let legend_inside = legend_box.is_some_and(|b| fits_clear(b) && apart);
    let notes_inside = notes_box.is_some_and(|b| fits_clear(b) && apart);
    let legend_box = legend_box.filter(|_| legend_inside);
    let notes_box = notes_box.filter(|_| notes_inside);
    let under_x = pad;
    let room = f64::from(ax.width) - 2.0 * pad;
    // The legend's entries under the plot: (entry, x of its sample, row), flowing left to right.
    let mut legend_under: Vec<(usize, f64, usize)> = Vec::new();
    if !legend.is_empty() && !legend_inside {
        let (mut x, mut row) = (under_x, 0);
        for (k, &(si, _, _)) in legend.iter().enumerate() {
            let w = sample_w + gap + text::width(&p.series[si].label, lfs);
            if x > under_x && x + w > under_x + room {
                (x, row) = (under_x, row + 1);
            }
            legend_under.push((k, x, row));
            x += w + 1.5 * fs;
        }
    }
    let legend_rows = legend_under.last().map_or(0, |&(_, _, r)| r + 1);
    let notes_under: Vec<String> = if !p.notes.is_empty() && !notes_inside {
        p.notes
            .iter()
            .flat_map(|n| wrap_words(n, room, lfs))
            .collect()
    } else {
        Vec::new()
    };
    let under_rows = legend_rows + notes_under.len();
    // The first row's centre under the plot, below the x axis's label.
    let under_y0 = f64::from(ax.height) - pad + gap + 0.5 * lfs * 0.73;
    let height = if under_rows == 0 {
        ax.height
    } else {
        (f64::from(ax.height) + under_rows as f64 * row_h + gap).ceil() as u32
    };

    // Frame, ticks and labels.
    let mut fg = Group::new("axes", "axes", None);
    let black = Line::solid(Rgba::BLACK, 0.6 * pt);
    let mut d = PathData::rect(fx, fy, fw, fh);
    let (maj, min) = (0.45 * fs, 0.25 * fs);
    for t in &ax.x_ticks {
        let l = if t.major { maj } else { min };
        d.move_to(t.position, fy + fh);
        d.line_to(t.position, fy + fh - l);
        d.move_to(t.position, fy);
        d.line_to(t.position, fy + l);
    }
    for t in &ax.y_ticks {
        let l = if t.major { maj } else { min };
        d.move_to(fx, t.position);
        d.line_to(fx + l, t.position);
        d.move_to(fx + fw, t.position);
        d.line_to(fx + fw - l, t.position);
    }
    fg.path(d, vec![Paint::Stroke(black)], false, "frame");
    let x_base = fy + fh + gap + 0.95 * lfs;
    for t in &ax.x_ticks {
        if let Some(l) = &t.label {
            fg.text(l, t.position, x_base, lfs, 0.5, 0.0, false, None);
        }
    }
    for t in &ax.y_ticks {
        if let Some(l) = &t.label {
            fg.text(l, fx - gap, t.position, lfs, 1.0, 0.5, false, None);
        }
    }
    let xl_base = x_base + 0.45 * lfs + gap + text::cap_height(fs) + 0.3 * fs;
    fg.text(
        &p.x_label,
        fx + fw / 2.0,
        xl_base,
        fs,
        0.5,
        0.0,
        false,
        None,
    );
    fg.text(
        &p.y_label,
        pad + 1.05 * fs,
        fy + fh / 2.0,
        fs,
        0.5,
        0.0,
        true,
        None,
    );
    if let Some(t) = &p.title {
        fg.text(
            t,
            fx + fw / 2.0,
            pad + text::cap_height(fs) + 0.2 * fs,
            fs,
            0.5,
            0.0,
            false,
            None,
        );
    }

    // Guide labels: each written along its own guide, as published figures do: turned to the
    // guide's slope on the page (reading left to right), centred on it with the line cut
    // under the text, as near the guide's visible end as the data allow, crossed by no other
    // guide and overlapping no other label, the legend or the notes. Only where no such place
    // is clear does a label stand level beside its line (a corner of it a little off the
    // line) or on it, with its own guide clearly the nearest line. Drawn over the data,
    // which the place avoids where it can.
    let mut lab = Group::new("guide-labels", "guide-labels", None);
    let mut taken: Vec<TurnedBox> = legend_box
        .into_iter()
        .chain(notes_box)
        .map(TurnedBox::level)
        .collect();
    let guide_boxes_from = taken.len();
    // What a label covers: a marker (weight 2) hides a datum, which counts far more than a
    // stretch of a fitted line or an error bar (sampled along its length), which stays
    // readable on either side.
    let mut data: Vec<((f64, f64), f64)> = samples
        .iter()
        .filter(|(_, wt)| *wt >= 1.0)
        .map(|&(q, wt)| (q, if wt >= 2.0 { 3.0 } else { 0.25 * wt }))
        .collect();
    let mut bar_points = Vec::new();
    sample_runs(&bars, 0.3 * fs, &mut bar_points);
    data.extend(bar_points.into_iter().map(|q| (q, 0.125)));
    // A datum this near a label's ink (its centre within a marker's radius and the halo's
    // width and a little more) counts as covered: it would touch the text.
    let near = r + 0.2 * fs;
    let offset = 0.3 * fs;
    let edge = 0.25 * fs;
    // The gap around a label written on its line.
    let cut_pad = 0.2 * fs;
    // How near another guide may pass a label (and farther is better up to a letter's size).
    let clear = 0.3 * fs;
    // Places along a guide are tried this far apart, each with this much of the guide shown
    // beyond the gap on both sides.
    let step = 0.2 * fs;
    let lead = cut_pad + 0.5 * fs;
    let within_frame = |b: &TurnedBox| {
        b.corners().iter().all(|&(x, y)| {
            x >= fx + edge && x <= fx + fw - edge && y >= fy + edge && y <= fy + fh - edge
        })
    };
    let mut cut_out: Vec<Option<TurnedBox>> = vec![None; guide_labels.len()];
    // The guides with the fewest places (the shortest in the frame) choose first.
    let mut order: Vec<usize> = (0..guide_labels.len()).collect();
    order.sort_by_key(|&i| guide_labels[i].1.len());
    for gi in order {
        let (label, cands) = &guide_labels[gi];
        // The nearest any other guide comes to a box, as drawn: a line already cut under its
        // own label is not drawn there.
        let other_distance = |b: &TurnedBox| {
            guide_runs
                .iter()
                .enumerate()
                .filter(|(gj, _)| *gj != gi)
                .map(|(gj, r)| match &cut_out[gj] {
                    Some(c) => runs_distance(&runs_outside(r, c), b),
                    None => runs_distance(r, b),
                })
                .fold(f64::INFINITY, f64::min)
        };
        // What every place must respect: the frame, the legend, the notes and the other
        // labels (with their gaps).
        let crowding = |b: &TurnedBox, gap: Option<&TurnedBox>| {
            let mut score = 0.0;
            if taken.iter().any(|t| overlaps(*t, b.grown(edge))) {
                score += 1e6;
            }
            if let Some(g) = gap
                && cut_out.iter().flatten().any(|c| overlaps(*c, *g))
            {
                score += 1e6;
            }
            // Nor stacked on another guide's label, which would read as a list.
            if taken[guide_boxes_from..]
                .iter()
                .any(|t| overlaps(*t, b.grown(lfs)))
            {
                score += 0.5;
            }
            score
        };

        // Written along the line, centred on it. The ink's box is the label's box.
        let (il, it, ir, ib) = text::ink_bounds(label, lfs);
        let (hw, hh) = (0.5 * (ir - il), 0.5 * (ib - it));
        let mut along: Option<(f64, TurnedBox)> = None;
        for (k, (c, u, bow)) in along_places(&guide_runs[gi], hw, lead, step)
            .into_iter()
            .enumerate()
        {
            let b = TurnedBox { c, u, hw, hh };
            if !within_frame(&b) {
                continue;
            }
            let gap = b.grown(cut_pad);
            // Covering as little data as possible, then as near the end as possible.
            let mut score = cover(&b, &data, near) + 0.01 * k as f64 * step / fs;
            score += crowding(&b, Some(&gap));
            // Crossed by another guide, or passed so near that the label might read as its.
            let other = other_distance(&b);
            if other < clear {
                score += 1e5;
            } else if other < lfs {
                score += (lfs - other) / lfs;
            }
            // Its own line, away from the gap, stays off the text too (a guide that turns
            // back), and runs along the text rather than bowing away from it.
            if runs_distance(&runs_outside(&guide_runs[gi], &gap), &b) < 0.5 * cut_pad {
                score += 1e5;
            }
            if bow > 0.5 * hh {
                score += 1e4;
            }
            if along.is_none_or(|(s0, _)| score < s0) {
                along = Some((score, b));
            }
        }
        let write_along = |b: TurnedBox,
                           lab: &mut Group,
                           taken: &mut Vec<TurnedBox>,
                           cut_out: &mut Vec<Option<TurnedBox>>| {
            let turn = Turn::new(b.c.0, b.c.1, b.degrees());
            lab.text_along(label, lfs, turn, Some(0.25 * fs));
            taken.push(b);
            cut_out[gi] = Some(b.grown(cut_pad));
        };
        if let Some((s0, b)) = along
            && s0 < 1e4
        {
            write_along(b, &mut lab, &mut taken, &mut cut_out);
            continue;
        }

        // Level, beside the line or on it: for a line rising to the right, down-right of it
        // (the label's upper left corner near the line, so the text starts at its line) or
        // up-left of it; for a falling line, up-right or down-left. Or centred on it.
        let w = text::width(label, lfs);
        let (above, below) = text::ink_above_below(label, lfs);
        let h = above + below;
        // (score, box, written on the line)
        let mut best: Option<(f64, Rect, bool)> = None;
        for (k, &(x, y, rising)) in cands.iter().enumerate() {
            let sides = if rising {
                [(1.0, 1.0), (-1.0, -1.0), (0.0, 0.0)]
            } else {
                [(1.0, -1.0), (-1.0, 1.0), (0.0, 0.0)]
            };
            for (side, (sx, sy)) in sides.into_iter().enumerate() {
                let on_line = side == 2;
                let cx = x + sx * offset;
                let cy = y + sy * offset;
                let rect = (
                    if on_line {
                        cx - 0.5 * w
                    } else if sx < 0.0 {
                        cx - w
                    } else {
                        cx
                    },
                    if on_line {
                        cy - 0.5 * h
                    } else if sy < 0.0 {
                        cy - h
                    } else {
                        cy
                    },
                    w,
                    h,
                );
                let b = TurnedBox::level(rect);
                if !within_frame(&b) {
                    continue;
                }
                let gap = b.grown(cut_pad);
                // Distances to the lines as drawn: a label on its line is as far from it as
                // the gap cut around it.
                let own = if on_line {
                    cut_pad
                } else {
                    runs_distance(&guide_runs[gi], &b)
                };
                let other = other_distance(&b);
                let mut score = cover(&b, &data, near) + 1e-3 * k as f64;
                // One side for every label where the data allow, then the other, then on the
                // line.
                score += [0.3, 1.0, 0.0][side];
                score += crowding(&b, on_line.then_some(&gap));
                // Crossed by a line (its own, beside it; another, anywhere).
                if own < 0.1 * fs || other < clear {
                    score += 1e5;
                }
                // Nearer another line than clearly its own: ranked by how much nearer.
                if other < (2.0 * own).max(own + 0.5 * fs) {
                    score += 1e4 + own / other.max(1e-9);
                }
                if best.is_none_or(|(s0, _, _)| score < s0) {
                    best = Some((score, rect, on_line));
                }
            }
        }
        // The least bad of both when neither is clear.
        match (along, best) {
            (Some((sa, b)), Some((sl, _, _))) if sa <= sl => {
                write_along(b, &mut lab, &mut taken, &mut cut_out);
            }
            (Some((_, b)), None) => write_along(b, &mut lab, &mut taken, &mut cut_out),
            (_, Some((_, b, on_line))) => {
                lab.text(
                    label,
                    b.0,
                    b.1 + above,
                    lfs,
                    0.0,
                    0.0,
                    false,
                    Some(0.25 * fs),
                );
                let tb = TurnedBox::level(b);
                taken.push(tb);
                if on_line {
                    cut_out[gi] = Some(tb.grown(cut_pad));
                }
            }
            _ => {}
        }
    }
    for (i, (g, runs)) in p.guides.iter().zip(&guide_runs).enumerate() {
        let d = match cut_out[i] {
            Some(c) => runs_path(&runs_outside(runs, &c)),
            None => runs_path(runs),
        };
        gg.ops.push(Op {
            d,
            paints: vec![Paint::Stroke(Line::solid(grey, 0.6 * pt))],
            clip: true,
            class: format!("guide guide-{i}"),
            label: Some(text::plain(&g.label)),
            turn: None,
        });
    }

    let mut lg = Group::new("legend", "legend", None);
    // One legend entry: its sample from x0 and its label after it, centred on yc.
    let entry = |lg: &mut Group, (si, line, markers): (usize, bool, bool), x0: f64, yc: f64| {
        let s = &p.series[si];
        let x1 = x0 + sample_w;
        if line {
            lg.path(
                PathData::line(x0, yc, x1, yc),
                vec![Paint::Stroke(Line {
                    color: state_colour(s.style),
                    width: lw,
                    dash: state_dash(s.style, lw),
                    round: true,
                })],
                false,
                "legend-sample",
            );
        }
        if markers {
            let mut d = PathData::new();
            marker(&mut d, s.style, 0.5 * (x0 + x1), yc, r);
            lg.path(
                d,
                vec![
                    Paint::Fill(state_colour(s.style)),
                    Paint::Stroke(Line::solid(Rgba(0, 0, 0, 220), 0.45 * pt)),
                ],
                false,
                "legend-sample",
            );
        }
        lg.text(&s.label, x1 + gap, yc, lfs, 0.0, 0.5, false, None);
    };
    if let Some((bx, by, bw, bh)) = legend_box {
        lg.path(
            PathData::rect(bx, by, bw, bh),
            vec![
                Paint::Fill(Rgba(255, 255, 255, 235)),
                Paint::Stroke(Line::solid(Rgba(120, 120, 120, 255), 0.4 * pt)),
            ],
            false,
            "legend-box",
        );
        for (k, &e) in legend.iter().enumerate() {
            let yc = by + inner + 0.5 * lfs * 0.73 + k as f64 * row_h;
            entry(&mut lg, e, bx + inner, yc);
        }
    }
    for &(k, x, row) in &legend_under {
        entry(&mut lg, legend[k], x, under_y0 + row as f64 * row_h);
    }
    let mut ng = Group::new("notes", "notes", None);
    if let Some((bx, by, _, _)) = notes_box {
        for (k, n) in p.notes.iter().enumerate() {
            let yc = by + inner + 0.5 * lfs * 0.73 + k as f64 * row_h;
            ng.text(n, bx + inner, yc, lfs, 0.0, 0.5, false, Some(0.3 * fs));
        }
    }
    for (k, n) in notes_under.iter().enumerate() {
        let yc = under_y0 + (legend_rows + k) as f64 * row_h;
        ng.text(n, under_x, yc, lfs, 0.0, 0.5, false, None);
    }

    groups.push(gg);
    groups.extend(series_groups);
    groups.push(lab);
    groups.push(fg);
    groups.push(lg);
    groups.push(ng);
    Ok(Figure {
        width: ax.width,
        height,
        dpi,
        frame: ax.frame,
        title,
        groups,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn labels(t: &[PlotTick]) -> Vec<String> {
        t.iter().filter_map(|t| t.label.clone()).collect()
    }

    #[test]
    fn wrapped_notes_keep_values_with_their_units_and_fit_their_room() {
        let note = "runA: alpha = 2.64 ± 0.48 above 0.883 M_{sun} over 272 leaves";
        let fs = 30.0;
        for room in [200.0, 400.0, 700.0, 1e6] {
            let lines = wrap_words(note, room, fs);
            // Nothing lost or added but the continuation lines' indent.
            let joined: Vec<&str> = lines.iter().flat_map(|l| l.split_whitespace()).collect();
            assert_eq!(
                joined,
                note.split_whitespace().collect::<Vec<_>>(),
                "{room}"
            );
            for (k, l) in lines.iter().enumerate() {
                assert!(
                    !l.ends_with(|c: char| c.is_ascii_digit() || c == '=' || c == '\u{b1}'),
                    "{room}: {l:?}"
                );
                assert_eq!(k > 0, l.starts_with("  "), "{room}: {l:?}");
                // Wider than the room only when it is one unbreakable piece: the value and its
                // uncertainty with the word before and after, or a value and its unit.
                if text::width(l, fs) > room {
                    let piece = [
                        "alpha = 2.64 \u{b1} 0.48 above",
                        "0.883 M_{sun}",
                        "272 leaves",
                    ];
                    assert!(piece.contains(&l.trim()), "{room}: {l:?}");
                }
            }
            assert_eq!(lines.len() == 1, room == 1e6, "{room}: {lines:?}");
        }
    }

    #[test]
    fn linear_ticks_step_by_one_two_five() {
        let t = scale_ticks(AxisScale::Linear, 0.0, 1.0, 0.0, 100.0, 6);
        assert_eq!(labels(&t), ["0.0", "0.2", "0.4", "0.6", "0.8", "1.0"]);
        let t = scale_ticks(AxisScale::Linear, -3.3, 47.0, 0.0, 100.0, 6);
        assert_eq!(labels(&t), ["0", "10", "20", "30", "40"]);
        assert!(t.iter().any(|t| !t.major));
        let t = scale_ticks(AxisScale::Linear, -0.5, 0.5, 0.0, 100.0, 5);
        assert_eq!(
            labels(&t),
            ["\u{2212}0.4", "\u{2212}0.2", "0.0", "0.2", "0.4"]
        );
    }

    #[test]
    fn log_ticks_label_decades() {
        let t = scale_ticks(AxisScale::Log10, 0.05, 200.0, 0.0, 100.0, 8);
        assert_eq!(labels(&t), ["0.1", "1", "10", "100"]);
        assert_eq!(t.iter().filter(|t| !t.major).count(), 5 + 8 + 8 + 8 + 1);
        let t = scale_ticks(AxisScale::Log10, 3e19, 2e23, 0.0, 100.0, 8);
        assert_eq!(labels(&t), ["10^{20}", "10^{21}", "10^{22}", "10^{23}"]);
        let t = scale_ticks(AxisScale::Log10, 1e-8, 1e8, 0.0, 100.0, 5);
        assert!(labels(&t).len() <= 5 && labels(&t).len() >= 3);
        // Less than two decades: 2 and 5 labelled too.
        let t = scale_ticks(AxisScale::Log10, 1.5, 30.0, 0.0, 100.0, 6);
        assert_eq!(labels(&t), ["2", "5", "10", "20"]);
        // Narrower still: linear steps.
        let t = scale_ticks(AxisScale::Log10, 3.0, 4.5, 0.0, 100.0, 6);
        assert!(labels(&t).len() >= 2);
    }

    #[test]
    fn step_outline_spans_bins() {
        let xm = AxisMap::new(AxisScale::Linear, 0.0, 4.0, 0.0, 4.0);
        let ym = AxisMap::new(AxisScale::Log10, 1.0, 100.0, 2.0, 0.0);
        let px = step_pixels(&[(1.0, 10.0), (2.0, 0.0), (3.0, 100.0)], &xm, &ym);
        assert_eq!(
            px,
            vec![
                Some((0.5, 1.0)),
                Some((1.5, 1.0)),
                None,
                Some((2.5, 0.0)),
                Some((3.5, 0.0))
            ]
        );
    }

    /// A box of half sizes 50 by 5 turned by `deg` degrees counter-clockwise on the page.
    fn turned(c: (f64, f64), deg: f64) -> TurnedBox {
        let a = deg.to_radians();
        TurnedBox {
            c,
            u: (a.cos(), -a.sin()),
            hw: 50.0,
            hh: 5.0,
        }
    }

    #[test]
    fn turned_boxes_overlap_only_where_they_meet() {
        // Two long thin boxes along the same diagonal, side by side 20 pixels apart (their
        // level bounding boxes overlap, the boxes do not), then 8 apart (less than the sum of
        // their half heights, 10: they overlap).
        let a = turned((100.0, 100.0), 45.0);
        let n = (0.5f64.sqrt(), 0.5f64.sqrt());
        let b = turned((100.0 + 20.0 * n.0, 100.0 + 20.0 * n.1), 45.0);
        assert!(!overlaps(a, b) && !overlaps(b, a));
        let b = turned((100.0 + 8.0 * n.0, 100.0 + 8.0 * n.1), 45.0);
        assert!(overlaps(a, b) && overlaps(b, a));
        // Crossing at right angles; and a level box beyond the end of a turned one.
        assert!(overlaps(a, turned((100.0, 100.0), -45.0)));
        // The turned box's rightmost corner, and a level box half a pixel to its right.
        let corner = a.page((50.0, 5.0));
        let level = TurnedBox::level((corner.0 + 0.5, corner.1 - 2.5, 30.0, 5.0));
        assert!(!overlaps(a, level));
        assert!(overlaps(a, level.grown(1.0)));
        // The level box is the rectangle it was made from.
        assert_eq!(level.degrees(), 0.0);
        let c = level.corners();
        assert!((c[0].0 - (corner.0 + 0.5)).abs() < 1e-12);
        assert!((c[2].1 - (corner.1 + 2.5)).abs() < 1e-12);
    }

    #[test]
    fn a_turned_box_cuts_a_line_along_its_own_sides() {
        let b = turned((200.0, 150.0), 30.0);
        // A line along the box's length through its centre loses exactly the box's length;
        // one across it, exactly its height.
        let along = [b.page((-120.0, 0.0)), b.page((120.0, 0.0))];
        let out = runs_outside(&[along.to_vec()], &b);
        assert_eq!(out.len(), 2);
        let cut = |p: (f64, f64)| b.own(p);
        assert!((cut(out[0][1]).0 + 50.0).abs() < 1e-9 && (cut(out[1][0]).0 - 50.0).abs() < 1e-9);
        let across = [b.page((10.0, -30.0)), b.page((10.0, 30.0))];
        let out = runs_outside(&[across.to_vec()], &b);
        assert!((cut(out[0][1]).1 + 5.0).abs() < 1e-9 && (cut(out[1][0]).1 - 5.0).abs() < 1e-9);
        // A line passing by is kept whole, and its distance is measured in the box's frame.
        let by = vec![b.page((-120.0, 12.0)), b.page((120.0, 12.0))];
        assert_eq!(
            runs_outside(std::slice::from_ref(&by), &b),
            vec![by.clone()]
        );
        assert!((runs_distance(&[by], &b) - 7.0).abs() < 1e-9);
        assert!(
            cover(
                &b,
                &[(b.page((49.0, 4.0)), 1.0), (b.page((52.0, 0.0)), 1.0)],
                0.0
            ) == 1.0
        );
    }

    #[test]
    fn places_along_a_line_lie_on_it_and_read_left_to_right() {
        // A straight line drawn from right to left, falling on the page to the left.
        let run = vec![(400.0, 100.0), (250.0, 175.0), (100.0, 250.0)];
        let len = 300.0f64.hypot(150.0);
        let places = along_places(std::slice::from_ref(&run), 60.0, 5.0, 10.0);
        assert_eq!(places.len(), ((len - 130.0) / 10.0).floor() as usize + 1);
        for &(c, u, bow) in &places {
            // On the line (its distance from the line through the run's ends), along it,
            // reading left to right, straight.
            let cross = (c.0 - 400.0) * 150.0 / len + (c.1 - 100.0) * 300.0 / len;
            assert!(cross.abs() < 1e-9, "{c:?}");
            assert!((u.0 - 300.0 / len).abs() < 1e-12 && (u.1 + 150.0 / len).abs() < 1e-12);
            assert!(bow < 1e-9);
        }
        // The first place is the one nearest the line's end, a half label and the lead from
        // it.
        let c = places[0].0;
        assert!(((c.0 - 100.0).hypot(c.1 - 250.0) - 65.0).abs() < 1e-9);
        // A vertical line reads upwards; a run shorter than the label holds no place.
        let up = along_places(&[vec![(50.0, 0.0), (50.0, 300.0)]], 60.0, 0.0, 10.0);
        assert!(!up.is_empty(), "{up:?}");
        assert!(up.iter().all(|p| p.1 == (0.0, -1.0)), "{up:?}");
        assert!(along_places(&[vec![(0.0, 0.0), (125.0, 0.0)]], 60.0, 5.0, 10.0).is_empty());
        // A bent line bows away from the chord under a label across its corner.
        let bent = vec![(0.0, 100.0), (100.0, 100.0), (200.0, 0.0)];
        let at_corner = along_places(&[bent], 50.0, 0.0, 1.0)
            .into_iter()
            .map(|p| p.2)
            .fold(0.0, f64::max);
        assert!(at_corner > 10.0);
    }

    #[test]
    fn segments_are_cut_to_the_frame() {
        let r = (0.0, 0.0, 10.0, 10.0);
        let c = clip_segment((-5.0, 5.0), (15.0, 5.0), r).unwrap();
        assert_eq!(c, ((0.0, 5.0), (10.0, 5.0)));
        assert!(clip_segment((-5.0, -5.0), (-1.0, 20.0), r).is_none());
    }
}

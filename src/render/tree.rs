//! The tree diagram: each structure is a vertical line over the levels it spans, joined to its
//! parent by a horizontal connector at its merge level; leaves are ordered by a depth-first
//! walk so no lines cross, and coloured and dashed by state as in the map figure.
//!
//! A leaf's line runs from its merge level (`bottom`) to its peak (`top`). A branch's line
//! runs from its merge level up to the highest merge level of its children, where it splits;
//! drawing it on to the branch's own peak would leave a stub with nothing attached.
//!
//! The line styles of the states are dashed as they are seen ([`leaf_dash`]): dashes and gaps
//! in units of the line's drawn width with its casing (at least a pixel and a half), gaps
//! measured clear of the casing's round caps, so that they stay open on thin lines, on
//! narrow figures and at low resolutions; each line's pattern is fitted to its length
//! ([`fit_dash`]) so that it begins at the upper end and ends at the merge level with a dash
//! or a dot, and the legend's samples are drawn so too.
//!
//! Leaf ids stand above their peaks; on a diagram too crowded for every id at [`MIN_ID_PT`]
//! they are placed highest peak first where they meet no line and no id already placed
//! ([`Sky`]), and the rest counted for the caller.
//!
//! A tree with more leaves than the plot has pixel columns (large maps give hundreds of
//! thousands) is drawn densely instead: single lines could not be told apart, and one path per
//! structure made SVG files of hundreds of megabytes. Each pixel that structures' lines cross
//! takes the colour of the state most of them have (ties: the state first in the legend;
//! structures without a state count as grey, last), drawn as runs of rows per pixel column,
//! one path per state; connectors that overlap on a quarter-pixel row are joined and those
//! shorter than a pixel left out. A note under the legend says so.

use super::axes;
use super::legend;
use super::scene::{Item, Line, Paint, PathData, Rgba, Scene};
use super::text;
use super::{RenderError, StateLegend, Stretch, Style, TreeNode, state_colour};
use std::collections::BTreeMap;

/// The smallest leaf ids the tree diagram draws, in points (common practice: print figures
/// keep text at 5 pt or more).
pub const MIN_ID_PT: f64 = 5.0;

/// Turned ids stand at least this many times their size apart (centre to centre), so that
/// neighbouring ids keep a gap of about a third of their size between their digits.
const ID_SPACING: f64 = 1.1;

/// How much wider than a leaf's coloured line its dark casing is, in points.
const CASING_PT: f64 = 0.8;

/// How leaf ids are written: upright, turned (every leaf has room for its id), or turned and
/// fitted where they meet no line and no other id (a crowded diagram).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum IdMode {
    Upright,
    Turned,
    Fitted,
}

/// The highest point drawn in each pixel column of the diagram (y down: the smallest y), for
/// fitting the ids of a crowded diagram: an id goes where no line is drawn above the foot of
/// its box across the columns the box covers (and where it meets no id placed before it).
/// Columns outside the range count as empty.
struct Sky {
    col0: i64,
    top: Vec<f64>,
}

impl Sky {
    fn new(col0: i64, ncols: usize) -> Self {
        Sky {
            col0,
            top: vec![f64::INFINITY; ncols],
        }
    }

    /// The columns that the span `a..=b` of x touches (column c holds x in c..c+1).
    fn columns(&self, a: f64, b: f64) -> std::ops::Range<usize> {
        let n = self.top.len() as i64;
        let c0 = (a.floor() as i64 - self.col0).clamp(0, n);
        let c1 = (b.floor() as i64 - self.col0 + 1).clamp(c0, n);
        c0 as usize..c1 as usize
    }

    /// Records ink up to `y` across `a..=b`.
    fn lower(&mut self, a: f64, b: f64, y: f64) {
        let r = self.columns(a, b);
        for t in &mut self.top[r] {
            *t = t.min(y);
        }
    }

    /// Whether nothing is drawn at or above `y` across `a..=b`.
    fn clear_above(&self, a: f64, b: f64, y: f64) -> bool {
        self.top[self.columns(a, b)].iter().all(|&t| t > y)
    }
}

/// Horizontal order of a tree: the leaf order of a depth-first walk and each node's position
/// in leaf slots (leaves at 0, 1, 2, ...; a branch midway between its first and last child).
#[derive(Debug, Clone, PartialEq)]
pub struct TreeLayout {
    pub leaf_order: Vec<u32>,
    pub x: BTreeMap<u32, f64>,
    /// Children of each node, in drawing order (ascending id).
    pub children: BTreeMap<u32, Vec<u32>>,
    pub roots: Vec<u32>,
}

/// Orders the tree. Fails on repeated ids, unknown parents or cycles.
pub fn tree_layout(nodes: &[TreeNode]) -> Result<TreeLayout, RenderError> {
    let mut by_id: BTreeMap<u32, &TreeNode> = BTreeMap::new();
    for n in nodes {
        if by_id.insert(n.id, n).is_some() {
            return Err(RenderError::BadTree(format!("id {} appears twice", n.id)));
        }
        if !(n.top.is_finite() && n.bottom.is_finite()) {
            return Err(RenderError::BadTree(format!(
                "structure {} has a level that is not finite",
                n.id
            )));
        }
    }
    let mut children: BTreeMap<u32, Vec<u32>> = BTreeMap::new();
    let mut roots = Vec::new();
    for n in by_id.values() {
        match n.parent {
            Some(p) if by_id.contains_key(&p) => children.entry(p).or_default().push(n.id),
            Some(p) => {
                return Err(RenderError::BadTree(format!(
                    "structure {} names parent {p}, which is not in the tree",
                    n.id
                )));
            }
            None => roots.push(n.id),
        }
    }
    let mut leaf_order = Vec::new();
    let mut x: BTreeMap<u32, f64> = BTreeMap::new();
    // Iterative post-order walk so deep trees cannot overflow the stack.
    for &r in &roots {
        let mut stack: Vec<(u32, bool)> = vec![(r, false)];
        while let Some((id, done)) = stack.pop() {
            let kids = children.get(&id).map(Vec::as_slice).unwrap_or(&[]);
            if kids.is_empty() {
                x.insert(id, leaf_order.len() as f64);
                leaf_order.push(id);
            } else if done {
                let a = x[&kids[0]];
                let b = x[&kids[kids.len() - 1]];
                x.insert(id, 0.5 * (a + b));
            } else {
                stack.push((id, true));
                for &k in kids.iter().rev() {
                    stack.push((k, false));
                }
            }
        }
    }
    for n in by_id.values() {
        if n.is_leaf && children.contains_key(&n.id) {
            return Err(RenderError::BadTree(format!(
                "structure {} is marked as a leaf but has children",
                n.id
            )));
        }
    }
    if x.len() != by_id.len() {
        return Err(RenderError::BadTree(
            "some structures are not reachable from a root (a cycle of parents)".into(),
        ));
    }
    Ok(TreeLayout {
        leaf_order,
        x,
        children,
        roots,
    })
}

pub(crate) fn scene(
    nodes: &[TreeNode],
    states: &[StateLegend],
    level_label: &str,
    s: &Style,
) -> Result<Scene, RenderError> {
    if nodes.is_empty() {
        return Err(RenderError::BadTree("there are no structures".into()));
    }
    if !(s.dpi.is_finite() && s.dpi >= 30.0 && s.dpi <= 2400.0) {
        return Err(RenderError::BadStyle(format!(
            "dpi must be between 30 and 2400, got {}",
            s.dpi
        )));
    }
    let tl = tree_layout(nodes)?;
    let by_id: BTreeMap<u32, &TreeNode> = nodes.iter().map(|n| (n.id, n)).collect();
    let lmin = nodes
        .iter()
        .map(|n| n.bottom.min(n.top))
        .fold(f64::INFINITY, f64::min);
    let lmax = nodes
        .iter()
        .map(|n| n.top.max(n.bottom))
        .fold(f64::NEG_INFINITY, f64::max);
    // A logarithmic level axis needs every level above zero; otherwise the axis is linear,
    // and the figure says so.
    let log = s.stretch == Stretch::Log && lmin > 0.0;
    let linear_instead = s.stretch == Stretch::Log && !log;
    let (lo, hi) = if log {
        let r = (lmax / lmin).max(1.0001);
        (lmin / r.powf(0.03), lmax * r.powf(0.03))
    } else {
        let r = (lmax - lmin).max(lmin.abs() * 1e-6).max(1e-300);
        (lmin - 0.03 * r, lmax + 0.03 * r)
    };
    let ticks = if log {
        let t = axes::log_ticks(lo, hi);
        if t.len() >= 2 {
            t
        } else {
            axes::linear_ticks(lo, hi, 5)
        }
    } else {
        axes::linear_ticks(lo, hi, 6)
    };

    let pt = s.dpi / 72.0;
    let fs = 9.0 * pt;
    let lfs = 0.9 * fs;
    let pad = 0.6 * fs;
    let gap = 0.35 * fs;
    let tick = 0.35 * fs;
    let w_total = s.width_px as f64;
    let lab_w = ticks
        .iter()
        .map(|(_, l)| text::width(l, lfs))
        .fold(0.0, f64::max);
    let left = (pad + 1.2 * fs + gap + lab_w + gap + tick + gap).round();
    let right = pad + fs;
    let pw = w_total - left - right;
    if pw < 16.0 {
        return Err(RenderError::BadStyle(format!(
            "a figure {} pixels wide at {} dpi leaves no room for the tree; make it wider or lower the dpi",
            s.width_px, s.dpi
        )));
    }
    let nslots = tl.leaf_order.len().max(1) as f64;
    let slot = pw / nslots;
    // Leaf ids, of the leaves chosen for one: upright at 0.75 of the text size when every
    // leaf has room for its id between its neighbours; else turned, at that size or smaller
    // down to MIN_ID_PT; else, on a crowded diagram, turned at MIN_ID_PT where they fit,
    // highest peak first ([`Sky`]). Those left out are counted (`ids_left_out`) for the
    // caller to say.
    let chosen: Vec<&TreeNode> = tl
        .leaf_order
        .iter()
        .map(|id| by_id[id])
        .filter(|n| n.show_id)
        .collect();
    let full_fs = 0.75 * fs;
    let min_fs = MIN_ID_PT * pt;
    let max_id_w = |size: f64| {
        chosen
            .iter()
            .map(|n| text::width(&n.id.to_string(), size))
            .fold(0.0, f64::max)
    };
    let ids = if chosen.is_empty() {
        None
    } else if slot >= max_id_w(full_fs) + 0.3 * full_fs {
        Some((IdMode::Upright, full_fs))
    } else if slot / ID_SPACING >= min_fs {
        Some((IdMode::Turned, full_fs.min(slot / ID_SPACING)))
    } else {
        Some((IdMode::Fitted, min_fs))
    };
    let id_room = match ids {
        None => 0.0,
        Some((IdMode::Upright, f)) => 1.3 * f,
        Some((_, f)) => max_id_w(f) + 0.5 * f,
    };
    let top = (pad + id_room).round();
    let ph = (0.55 * w_total).round();

    // Legend rows.
    // Only the states some structure of the tree has.
    let mut shown = vec![false; states.len()];
    for n in nodes {
        if let Some(f) = n.state.and_then(|i| shown.get_mut(i)) {
            *f = true;
        }
    }
    let keys = legend::keys(states, &shown, false);
    let rows = legend::rows(&keys, fs, gap, w_total - 2.0 * pad);
    let legend_top = top + ph + pad;
    // Fewer than one figure pixel per leaf: the dense drawing, with a note under the legend.
    let dense = slot < 1.0;
    let mut note: Vec<String> = Vec::new();
    if linear_instead {
        note.push("levels at or below zero: the level axis is linear, not logarithmic".into());
    }
    // Ids left out are said by the caller in its summary, not in the figure, which would
    // otherwise carry a message to its user into a paper.
    if dense {
        let (a, b) = (
            format!(
                "{} leaves on {} pixel columns:",
                tl.leaf_order.len(),
                pw.round()
            ),
            "each pixel shows the state of most structures crossing it".to_string(),
        );
        if text::width(&a, lfs) + text::width(&b, lfs) + lfs < w_total - 2.0 * pad {
            note.push(format!("{a} {b}"));
        } else {
            note.extend([a, b]);
        }
    }
    let height = (legend_top + (rows.len() + note.len()) as f64 * 1.5 * fs + pad).ceil() as u32;
    super::figure::check_figure_size(s.width_px, height)?;

    let ymap = |v: f64| {
        let t = if log {
            (v / lo).ln() / (hi / lo).ln()
        } else {
            (v - lo) / (hi - lo)
        };
        top + ph - t * ph
    };
    let xmap = |slotx: f64| left + (slotx + 0.5) * slot;

    let mut sc = Scene::new(s.width_px, height, s.dpi, "tree of structures");
    sc.leaves_to_label = chosen.len();
    let lw = (0.9 * pt).min(0.45 * slot).max(0.25 * pt);
    let grey = Rgba(60, 60, 60, 255);
    // The upper end of each structure's vertical line (its peak, or a branch's highest split).
    let upper_of = |n: &TreeNode| {
        let kids = tl.children.get(&n.id).map(Vec::as_slice).unwrap_or(&[]);
        if kids.is_empty() {
            n.top
        } else {
            kids.iter()
                .map(|k| by_id[k].bottom)
                .fold(f64::NEG_INFINITY, f64::max)
                .max(n.bottom)
        }
    };

    if dense {
        // More leaves than figure pixels across: single lines cannot be told apart, so the
        // connectors are joined along each quarter-pixel row and the vertical lines drawn per
        // pixel (below).
        let mut conns: Vec<(i64, f64, f64)> = Vec::new();
        for n in nodes {
            if let Some(p) = n.parent {
                let (a, b) = (xmap(tl.x[&n.id]), xmap(tl.x[&p]));
                conns.push(((ymap(n.bottom) * 4.0).round() as i64, a.min(b), a.max(b)));
            }
        }
        let mut conn = PathData::new();
        for (row, a, b) in merge_spans(conns, 0.5) {
            if b - a >= 1.0 {
                conn.move_to(a, row as f64 / 4.0);
                conn.line_to(b, row as f64 / 4.0);
            }
        }
        if !conn.0.is_empty() {
            sc.path(
                conn,
                vec![Paint::Stroke(Line::solid(grey, lw))],
                "connector",
            );
        }
        // Each pixel of the plot gets the colour of the state most of the structures whose
        // lines cross it have (ties: the state first in the legend; no state: grey, which
        // wins only where it is the majority). Groups: state i -> i, no state -> nstates.
        let nstates = nodes
            .iter()
            .filter_map(|n| n.state)
            .map(|st| st + 1)
            .fold(states.len(), usize::max);
        let ng = nstates + 1;
        let col0 = left.floor() as i64;
        let ncols_px = ((left + pw).ceil() as i64 - col0 + 1).max(1) as usize;
        let row0 = top.floor() as i64;
        let nrows_px = ((top + ph).ceil() as i64 - row0 + 1).max(1) as usize;
        let by_col: Vec<(u32, u32, u32, u32)> = nodes
            .iter()
            .map(|n| {
                let g = n.state.unwrap_or(nstates);
                let col = (xmap(tl.x[&n.id]).floor() as i64 - col0).clamp(0, ncols_px as i64 - 1);
                let (ya, yb) = (ymap(upper_of(n)), ymap(n.bottom));
                let (ya, yb) = (ya.min(yb), ya.max(yb));
                let r0 = (ya.floor() as i64 - row0).clamp(0, nrows_px as i64 - 1);
                let r1 = (yb.ceil() as i64 - row0).clamp(r0 + 1, nrows_px as i64);
                (col as u32, g as u32, r0 as u32, r1 as u32)
            })
            .collect();
        let mut paths: Vec<PathData> = vec![PathData::new(); ng];
        for (col, g, r0, r1) in majority_runs(by_col, nrows_px, ng) {
            let x = (col0 + col as i64) as f64 + 0.5;
            paths[g].move_to(x, (row0 + r0 as i64) as f64);
            paths[g].line_to(x, (row0 + r1 as i64) as f64);
        }
        for (g, d) in paths.into_iter().enumerate() {
            if d.0.is_empty() {
                continue;
            }
            let (color, class) = if g == nstates {
                (grey, "dense".to_string())
            } else {
                (state_colour(g), format!("dense state-{g}"))
            };
            sc.path(d, vec![Paint::Stroke(Line::solid(color, 1.0))], &class);
        }
    } else {
        // Connectors first, then the vertical lines on top.
        let mut conn = PathData::new();
        for n in nodes {
            if let Some(p) = n.parent {
                let y = ymap(n.bottom);
                conn.move_to(xmap(tl.x[&n.id]), y);
                conn.line_to(xmap(tl.x[&p]), y);
            }
        }
        if !conn.0.is_empty() {
            sc.path(
                conn,
                vec![Paint::Stroke(Line::solid(grey, lw))],
                "connector",
            );
        }
        let mut ordered: Vec<&TreeNode> = nodes.iter().collect();
        ordered.sort_by_key(|n| n.id);
        for n in ordered {
            let is_leaf = !tl.children.contains_key(&n.id);
            let x = xmap(tl.x[&n.id]);
            // Drawn from the upper end down: a patterned line begins there with a whole dash
            // (and ends with one at its merge level, `fit_dash`).
            let d = PathData::line(x, ymap(upper_of(n)), x, ymap(n.bottom));
            let (paints, class) = match n.state {
                Some(st) => {
                    let len = (ymap(n.bottom) - ymap(upper_of(n))).abs();
                    let casing = lw + CASING_PT * pt;
                    let dash = fit_dash(&leaf_dash(st, lw, casing), len, casing);
                    (
                        vec![
                            Paint::Stroke(Line {
                                color: Rgba(0, 0, 0, 200),
                                width: casing,
                                dash: dash.clone(),
                                round: true,
                            }),
                            Paint::Stroke(Line {
                                color: state_colour(st),
                                width: lw,
                                dash,
                                round: true,
                            }),
                        ],
                        format!("{} state-{st}", if is_leaf { "leaf" } else { "branch" }),
                    )
                }
                None => (
                    vec![Paint::Stroke(Line::solid(grey, lw))],
                    (if is_leaf { "leaf" } else { "branch" }).to_string(),
                ),
            };
            sc.items.push(Item::Path {
                d,
                paints,
                clip: false,
                id: Some(format!("node-{}", n.id)),
                class,
                label: None,
            });
        }
    }
    // Leaf ids, over the lines.
    if let Some((mode, id_fs)) = ids {
        let at = |n: &TreeNode| (xmap(tl.x[&n.id]), ymap(n.top) - 0.4 * id_fs);
        let placed: Vec<&TreeNode> = match mode {
            IdMode::Upright | IdMode::Turned => chosen.clone(),
            IdMode::Fitted => {
                // The ink of every line, as drawn with its casing (a connector's half width
                // below its row, a vertical line's round cap above its end).
                let mut sky = Sky::new(left.floor() as i64 - 1, pw.ceil() as usize + 3);
                let mut conns: Vec<(i64, f64, f64)> = Vec::new();
                for n in nodes {
                    if let Some(p) = n.parent {
                        let (a, b) = (xmap(tl.x[&n.id]), xmap(tl.x[&p]));
                        conns.push(((ymap(n.bottom) * 4.0).round() as i64, a.min(b), a.max(b)));
                    }
                    // The dense drawing's runs are whole pixels, up to one above the end.
                    let h = 0.5
                        * if n.state.is_some() {
                            lw + CASING_PT * pt
                        } else {
                            lw
                        };
                    let h = if dense { h.max(1.0) } else { h };
                    let x = xmap(tl.x[&n.id]);
                    sky.lower(x - h, x + h, ymap(upper_of(n)).min(ymap(n.bottom)) - h);
                }
                for (row, a, b) in merge_spans(conns, 0.0) {
                    sky.lower(a, b, row as f64 / 4.0 - 0.5 * lw - 0.125);
                }
                // Highest peak first (equal peaks by id), as the map figure places its labels.
                let mut order = chosen.clone();
                order.sort_by(|a, b| b.top.total_cmp(&a.top).then(a.id.cmp(&b.id)));
                let half = 0.5 * ID_SPACING * id_fs;
                let mut boxes: Vec<(f64, f64, f64, f64)> = Vec::new();
                let mut placed = Vec::new();
                for n in order {
                    let (x, y) = at(n);
                    let b = (
                        x - half,
                        y - text::width(&n.id.to_string(), id_fs) - 0.3 * id_fs,
                        x + half,
                        y,
                    );
                    let apart = |o: &(f64, f64, f64, f64)| {
                        o.2 <= b.0 || b.2 <= o.0 || o.3 <= b.1 || b.3 <= o.1
                    };
                    if sky.clear_above(b.0, b.2, y) && boxes.iter().all(apart) {
                        boxes.push(b);
                        placed.push(n);
                    }
                }
                placed.sort_by_key(|n| n.id);
                placed
            }
        };
        sc.labels_left_out = chosen.len() - placed.len();
        for n in placed {
            let (x, y) = at(n);
            let t = n.id.to_string();
            if mode == IdMode::Upright {
                sc.text(&t, x, y, id_fs, 0.5, 0.0, false, Rgba::BLACK, None);
            } else {
                sc.text(&t, x, y, id_fs, 0.0, 0.5, true, Rgba::BLACK, None);
            }
            if let Some(Item::Path { class, id, .. }) = sc.items.last_mut() {
                *class = "leaf-id".into();
                *id = Some(format!("id-{}", n.id));
            }
        }
    }
    for (i, line) in note.iter().enumerate() {
        let y = legend_top + (rows.len() + i) as f64 * 1.5 * fs + text::cap_height(lfs);
        sc.text(line, pad, y, lfs, 0.0, 1.0, false, Rgba::BLACK, None);
    }

    // Level axis.
    let ax = left - gap;
    let mut d = PathData::line(ax, top, ax, top + ph);
    for (v, _) in &ticks {
        let y = ymap(*v);
        d.move_to(ax, y);
        d.line_to(ax - tick, y);
    }
    sc.path(
        d,
        vec![Paint::Stroke(Line::solid(Rgba::BLACK, 0.6 * pt))],
        "axis",
    );
    for (v, l) in &ticks {
        sc.text(
            l,
            ax - tick - gap,
            ymap(*v),
            lfs,
            1.0,
            0.5,
            false,
            Rgba::BLACK,
            None,
        );
    }
    sc.text(
        level_label,
        pad + text::cap_height(fs),
        top + ph / 2.0,
        fs,
        0.5,
        0.0,
        true,
        Rgba::BLACK,
        None,
    );

    // Legend.
    // Legend, its samples dashed as the lines of the diagram.
    let (sample_w, sample_casing) = (0.9 * pt, (0.9 + CASING_PT) * pt);
    legend::draw_with(
        &mut sc,
        &rows,
        pad,
        legend_top,
        fs,
        gap,
        &legend::SampleLines {
            width: sample_w,
            casing: sample_casing,
            pt,
        },
        &|st, len| fit_dash(&leaf_dash(st, sample_w, sample_casing), len, sample_casing),
    );
    Ok(sc)
}

/// The dash pattern `p` (lengths on, off, on, off, ..., beginning with a dash) of a line with
/// round caps `cap` wide, fitted to a line `len` long so that it begins and ends with a dash
/// (or dot) of the pattern and both its ends (a structure's peak and merge level) are marked:
/// the gaps as seen (each less the caps' `cap`) are stretched or shrunk alike, by the factor
/// nearest 1 among those that keep them at least half as long, for the number of dashes that
/// needs. A line too short for that gets a dash at each end, shortened to leave between them
/// half the pattern's first gap, as far as the line allows. An empty pattern (solid) stays
/// empty.
pub(crate) fn fit_dash(p: &[f64], len: f64, cap: f64) -> Vec<f64> {
    let usable = p.len() >= 2 && p.iter().all(|&v| v.is_finite() && v > 0.0);
    if !usable || !len.is_finite() || len <= 0.0 {
        return p.to_vec();
    }
    let dash = |k: usize| p[(2 * k) % p.len()];
    // A gap as seen: the caps of the dashes either side reach into it.
    let seen = |k: usize| (p[(2 * k + 1) % p.len()] - cap).max(0.0);
    if (0..p.len() / 2).all(|k| seen(k) == 0.0) {
        // Gaps the caps close: nothing to fit.
        return p.to_vec();
    }
    // With n dashes and n - 1 gaps, the factor of the gaps as seen is (len - dashes - caps)
    // / gaps, which falls as n grows.
    let (mut dashes, mut gaps) = (dash(0), 0.0);
    let mut best: Option<f64> = None;
    for n in 2usize.. {
        dashes += dash(n - 1);
        gaps += seen(n - 2);
        let f = (len - dashes - (n - 1) as f64 * cap) / gaps;
        if f.is_nan() || f < 0.5 {
            break;
        }
        if f.is_finite() && best.is_none_or(|b| f.ln().abs() < b.ln().abs()) {
            best = Some(f);
        }
    }
    match best {
        Some(f) => p
            .iter()
            .enumerate()
            .map(|(i, &v)| {
                if i % 2 == 1 {
                    cap + f * (v - cap).max(0.0)
                } else {
                    v
                }
            })
            .collect(),
        None => {
            let g = cap + 0.5 * seen(0);
            let d = ((len - g) / 2.0).max(0.01);
            vec![d, (len - 2.0 * d).max(0.01)]
        }
    }
}

/// The least length, in output pixels, of a pattern unit of [`leaf_dash`]: at low
/// resolutions (lines a pixel or two wide) the gaps stay at least a pixel and a half wide.
const LEAST_DASH_UNIT_PX: f64 = 1.5;

/// The dash pattern of state `st` (the line styles of [`super::state_line_style`]) for a line
/// of width `w` over a dark casing `casing` wide, both with round caps. The pattern is set by
/// what is seen: dashes, dots and gaps in units of the casing's width (the line's whole drawn
/// width), at least [`LEAST_DASH_UNIT_PX`], with the round caps taken off the dashes and
/// added to the gaps, so that the casing's caps do not close the gaps (a gap of a unit or
/// more stays open at any width). Dashed: dashes of 2.5 units, gaps of 1.25; dotted: dots
/// one casing wide, gaps of 1 unit; dash-dot: a dash of 2.5 units and a dot, gaps of 1 unit;
/// long dash: dashes of 5 units, gaps of 1.25. An empty pattern is a solid line.
pub(crate) fn leaf_dash(st: usize, w: f64, casing: f64) -> Vec<f64> {
    let c = casing.max(w);
    let u = c.max(LEAST_DASH_UNIT_PX);
    // A dash seen `on` units long and a gap seen `off` units long.
    let on = |k: f64| (k * u - c).max(0.01);
    let off = |k: f64| k * u + c;
    match super::state_line_style(st) {
        "dashed" => vec![on(2.5), off(1.25)],
        "dotted" => vec![0.01, off(1.0)],
        "dash-dot" => vec![on(2.5), off(1.0), 0.01, off(1.0)],
        "long-dash" => vec![on(5.0), off(1.25)],
        _ => Vec::new(),
    }
}

/// The majority drawing of a dense tree. Each input line `(column, group, r0, r1)` covers
/// rows `r0..r1` (`r1 <= nrows`) of its pixel column; the result gives, for every pixel that
/// at least one line covers, the group with the most lines there (ties: the lowest group), as
/// runs `(column, group, start, end)` of rows `start..end`, by column and then row.
fn majority_runs(
    mut lines: Vec<(u32, u32, u32, u32)>,
    nrows: usize,
    ng: usize,
) -> Vec<(u32, usize, u32, u32)> {
    lines.sort_unstable();
    let mut out = Vec::new();
    let mut diff = vec![0i32; ng * (nrows + 1)];
    let mut count = vec![0i32; ng];
    let mut i = 0;
    while i < lines.len() {
        let col = lines[i].0;
        diff.fill(0);
        let (mut lo, mut hi) = (u32::MAX, 0u32);
        while i < lines.len() && lines[i].0 == col {
            let (_, g, r0, r1) = lines[i];
            diff[g as usize * (nrows + 1) + r0 as usize] += 1;
            diff[g as usize * (nrows + 1) + r1 as usize] -= 1;
            lo = lo.min(r0);
            hi = hi.max(r1);
            i += 1;
        }
        count.fill(0);
        let mut run: Option<(usize, u32)> = None;
        for r in lo..=hi {
            let winner =
                if r < hi {
                    for (g, c) in count.iter_mut().enumerate() {
                        *c += diff[g * (nrows + 1) + r as usize];
                    }
                    let (g, c) = count.iter().enumerate().fold((0, 0), |best, (g, &c)| {
                        if c > best.1 { (g, c) } else { best }
                    });
                    (c > 0).then_some(g)
                } else {
                    None
                };
            if run.map(|(g, _)| g) != winner {
                if let Some((g, start)) = run {
                    out.push((col, g, start, r));
                }
                run = winner.map(|g| (g, r));
            }
        }
    }
    out
}

/// Joins spans `(key, a, b)` (a <= b) of equal key that overlap or lie within `gap` of each
/// other; the result is sorted by key, then by `a`, and its spans of one key are separated by
/// more than `gap`. Every input span lies inside one output span, and every output end is an
/// input end.
fn merge_spans(mut spans: Vec<(i64, f64, f64)>, gap: f64) -> Vec<(i64, f64, f64)> {
    spans.sort_unstable_by(|x, y| x.0.cmp(&y.0).then(x.1.total_cmp(&y.1)));
    let mut out: Vec<(i64, f64, f64)> = Vec::new();
    for (k, a, b) in spans {
        match out.last_mut() {
            Some(last) if last.0 == k && a <= last.2 + gap => last.2 = last.2.max(b),
            _ => out.push((k, a, b)),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn node(id: u32, parent: Option<u32>) -> TreeNode {
        TreeNode {
            id,
            parent,
            top: 1.0,
            bottom: 0.0,
            is_leaf: false,
            state: None,
            show_id: true,
        }
    }

    #[test]
    fn depth_first_order_has_no_crossings() {
        // Root 1 with children 2 (leaves 4, 6) and 3 (leaf 5): leaves of one branch are
        // adjacent, so each branch's span of slots holds only its own leaves.
        let nodes = vec![
            node(1, None),
            node(2, Some(1)),
            node(3, Some(1)),
            node(4, Some(2)),
            node(5, Some(3)),
            node(6, Some(2)),
        ];
        let t = tree_layout(&nodes).unwrap();
        assert_eq!(t.leaf_order, vec![4, 6, 5]);
        assert_eq!(t.x[&2], 0.5);
        assert_eq!(t.x[&1], 0.5 * (0.5 + 2.0));
    }

    /// Small random generator for the tests (xorshift).
    fn rng(seed: u64) -> impl FnMut(u64) -> u64 {
        let mut s = seed;
        move |n| {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            s % n
        }
    }

    /// The runs equal a count made pixel by pixel: every covered pixel lies in exactly one run,
    /// of the group with the most lines there (lowest group on ties); no run covers an empty
    /// pixel.
    #[test]
    fn majority_runs_equal_a_pixel_by_pixel_count() {
        let mut r = rng(11);
        for trial in 0..200 {
            let (ncols, nrows, ng) = (1 + r(6) as u32, 1 + r(40) as usize, 1 + r(5) as usize);
            let nlines = r(60) as usize + trial % 3;
            let lines: Vec<(u32, u32, u32, u32)> = (0..nlines)
                .map(|_| {
                    let r0 = r(nrows as u64) as u32;
                    let r1 = r0 + 1 + r((nrows as u64) - r0 as u64) as u32;
                    (r(ncols as u64) as u32, r(ng as u64) as u32, r0, r1)
                })
                .collect();
            let mut counts = vec![vec![vec![0u32; ng]; nrows]; ncols as usize];
            for &(c, g, r0, r1) in &lines {
                for row in r0..r1 {
                    counts[c as usize][row as usize][g as usize] += 1;
                }
            }
            let mut drawn = vec![vec![None; nrows]; ncols as usize];
            let runs = majority_runs(lines, nrows, ng);
            assert!(runs.windows(2).all(|w| (w[0].0, w[0].2) < (w[1].0, w[1].2)));
            for (c, g, a, b) in runs {
                assert!(a < b);
                for row in a..b {
                    assert!(
                        drawn[c as usize][row as usize].is_none(),
                        "pixel drawn twice"
                    );
                    drawn[c as usize][row as usize] = Some(g);
                }
            }
            for c in 0..ncols as usize {
                for row in 0..nrows {
                    let cs = &counts[c][row];
                    let best = *cs.iter().max().unwrap();
                    let want = (best > 0).then(|| cs.iter().position(|&x| x == best).unwrap());
                    assert_eq!(drawn[c][row], want, "column {c}, row {row}, counts {cs:?}");
                }
            }
        }
    }

    /// Every span lies inside one joined span of its key; joined spans begin and end where
    /// input spans do and lie more than the gap apart.
    #[test]
    fn joined_spans_cover_their_inputs_and_add_no_ends() {
        let mut r = rng(5);
        for _ in 0..200 {
            let spans: Vec<(i64, f64, f64)> = (0..r(50))
                .map(|_| {
                    let a = r(1000) as f64 / 10.0;
                    (r(4) as i64, a, a + r(100) as f64 / 10.0)
                })
                .collect();
            let out = merge_spans(spans.clone(), 0.5);
            for &(k, a, b) in &spans {
                assert_eq!(
                    out.iter()
                        .filter(|o| o.0 == k && o.1 <= a && b <= o.2)
                        .count(),
                    1
                );
            }
            for &(k, a, b) in &out {
                assert!(spans.iter().any(|s| s.0 == k && s.1 == a));
                assert!(spans.iter().any(|s| s.0 == k && s.2 == b));
            }
            for w in out.windows(2) {
                if w[0].0 == w[1].0 {
                    assert!(w[1].1 > w[0].2 + 0.5);
                }
            }
        }
    }

    /// The ends of the dashes of a pattern laid along a line from 0: (start, end) of each
    /// dash that begins before `len`.
    fn dashes_along(p: &[f64], len: f64) -> Vec<(f64, f64)> {
        let mut out = Vec::new();
        let mut at = 0.0;
        for k in 0.. {
            if at > len + 1e-9 {
                break;
            }
            let on = p[(2 * k) % p.len()];
            out.push((at, at + on));
            at += on + p[(2 * k + 1) % p.len()];
        }
        out
    }

    /// A fitted pattern ends with the end of a dash exactly at the line's end (so both ends are
    /// marked), keeps its dashes, and keeps each gap as seen (less the caps) at least half as
    /// long as the pattern's; a solid pattern stays solid.
    #[test]
    fn fitted_dashes_mark_both_ends_and_keep_their_gaps_open() {
        let mut r = rng(3);
        assert!(fit_dash(&[], 100.0, 2.0).is_empty());
        for trial in 0..2000 {
            let cap = 0.5 + r(40) as f64 / 10.0;
            let st = 1 + trial % 4;
            let p = leaf_dash(st, 0.5 * cap, cap);
            let len = 0.1 + r(4000) as f64 / 10.0;
            let q = fit_dash(&p, len, cap);
            assert_eq!(q.len() % 2, 0);
            let along = dashes_along(&q, len);
            let last = along.last().unwrap();
            assert!(
                (last.1 - len).abs() < 1e-9 * len.max(1.0),
                "style {st}, len {len}: the last dash ends at {}",
                last.1
            );
            assert!(along.len() >= 2, "a dash at each end");
            // Long enough for the pattern's two first dashes and half its first gap: the
            // pattern itself, its gaps scaled.
            let room = p[0] + p[2 % p.len()] + cap + 0.5 * (p[1] - cap);
            if len >= room {
                for (i, (&a, &b)) in p.iter().zip(&q).enumerate() {
                    if i % 2 == 0 {
                        assert_eq!(a, b);
                    } else {
                        assert!(b - cap >= 0.5 * (a - cap) - 1e-9, "gap {b} of {a}");
                    }
                }
            }
        }
    }

    /// Each style's gaps as seen are at least a unit (the casing's width, at least
    /// LEAST_DASH_UNIT_PX) once the casing's round caps are taken off, and dashes are longer
    /// than dots.
    #[test]
    fn line_styles_leave_gaps_of_a_unit() {
        for (w, casing) in [(0.25, 1.05), (3.75, 7.08), (0.9, 1.7), (20.0, 35.0)] {
            let u = f64::max(casing, LEAST_DASH_UNIT_PX);
            assert!(leaf_dash(0, w, casing).is_empty());
            for st in 1..5 {
                let p = leaf_dash(st, w, casing);
                for (i, v) in p.iter().enumerate() {
                    if i % 2 == 1 {
                        assert!(v - casing >= u - 1e-9, "style {st}: gap {v} at {casing}");
                    }
                }
            }
            assert!(leaf_dash(1, w, casing)[0] + casing >= 2.5 * u - 1e-9);
            assert!(leaf_dash(4, w, casing)[0] > leaf_dash(1, w, casing)[0]);
            assert_eq!(leaf_dash(2, w, casing)[0], 0.01);
        }
    }

    #[test]
    fn cycles_and_unknown_parents_are_refused() {
        let nodes = vec![node(1, Some(2)), node(2, Some(1))];
        assert!(tree_layout(&nodes).is_err());
        let nodes = vec![node(1, Some(9))];
        assert!(tree_layout(&nodes).is_err());
        let mut nodes = vec![node(1, None), node(2, Some(1))];
        nodes[0].is_leaf = true;
        assert!(tree_layout(&nodes).is_err());
    }
}

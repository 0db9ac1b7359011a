//! The tree diagram: each structure is a vertical line over the levels it spans, joined to its
//! parent by a horizontal connector at its merge level; leaves are ordered by a depth-first
//! walk so no lines cross, and coloured and dashed by state as in the map figure.
//!
//! A leaf's line runs from its merge level (`bottom`) to its peak (`top`). A branch's line
//! runs from its merge level up to the highest merge level of its children, where it splits;
//! drawing it on to the branch's own peak would leave a stub with nothing attached.

use super::axes;
use super::legend;
use super::scene::{Line, Paint, PathData, Rgba, Scene};
use super::text;
use super::{RenderError, StateLegend, Stretch, Style, TreeNode, state_colour, state_dash};
use std::collections::BTreeMap;

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
    let log = s.stretch == Stretch::Log;
    let lmin = nodes
        .iter()
        .map(|n| n.bottom.min(n.top))
        .fold(f64::INFINITY, f64::min);
    let lmax = nodes
        .iter()
        .map(|n| n.top.max(n.bottom))
        .fold(f64::NEG_INFINITY, f64::max);
    if log && lmin <= 0.0 {
        return Err(RenderError::BadStyle(
            "a logarithmic level axis needs every level above zero; use a linear stretch".into(),
        ));
    }
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
    let id_fs = 0.75 * fs;
    let max_id_w = tl
        .leaf_order
        .iter()
        .map(|id| text::width(&id.to_string(), id_fs))
        .fold(0.0, f64::max);
    // Leaf ids: upright when they fit between neighbours, turned when only their height
    // fits, left out when not even that.
    let id_mode = if slot >= max_id_w + 0.3 * id_fs {
        1
    } else if slot >= 1.1 * id_fs {
        2
    } else {
        0
    };
    let id_room = match id_mode {
        1 => 1.3 * id_fs,
        2 => max_id_w + 0.5 * id_fs,
        _ => 0.0,
    };
    let top = (pad + id_room).round();
    let ph = (0.55 * w_total).round();

    // Legend rows.
    let rows = legend::rows(states, fs, gap, w_total - 2.0 * pad);
    let legend_top = top + ph + pad;
    let height = (legend_top + rows.len() as f64 * 1.5 * fs + pad).ceil() as u32;

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
    let lw = (0.9 * pt).min(0.45 * slot).max(0.25 * pt);

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
            vec![Paint::Stroke(Line::solid(Rgba(60, 60, 60, 255), lw))],
            "connector",
        );
    }
    let mut ordered: Vec<&TreeNode> = nodes.iter().collect();
    ordered.sort_by_key(|n| n.id);
    for n in ordered {
        let kids = tl.children.get(&n.id).map(Vec::as_slice).unwrap_or(&[]);
        let upper = if kids.is_empty() {
            n.top
        } else {
            kids.iter()
                .map(|k| by_id[k].bottom)
                .fold(f64::NEG_INFINITY, f64::max)
                .max(n.bottom)
        };
        let x = xmap(tl.x[&n.id]);
        let d = PathData::line(x, ymap(n.bottom), x, ymap(upper));
        let (paints, class) = match n.state {
            Some(st) => {
                let dash = state_dash(st, lw);
                (
                    vec![
                        Paint::Stroke(Line {
                            color: Rgba(0, 0, 0, 200),
                            width: lw + 0.8 * pt,
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
                    format!(
                        "{} state-{st}",
                        if kids.is_empty() { "leaf" } else { "branch" }
                    ),
                )
            }
            None => (
                vec![Paint::Stroke(Line::solid(Rgba(60, 60, 60, 255), lw))],
                (if kids.is_empty() { "leaf" } else { "branch" }).to_string(),
            ),
        };
        sc.items.push(super::scene::Item::Path {
            d,
            paints,
            clip: false,
            id: Some(format!("node-{}", n.id)),
            class,
            label: None,
        });
        if kids.is_empty() && id_mode != 0 {
            let y = ymap(n.top) - 0.4 * id_fs;
            let t = n.id.to_string();
            if id_mode == 1 {
                sc.text(&t, x, y, id_fs, 0.5, 0.0, false, Rgba::BLACK, None);
            } else {
                sc.text(&t, x, y, id_fs, 0.0, 0.5, true, Rgba::BLACK, None);
            }
        }
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
    legend::draw(
        &mut sc,
        states,
        &rows,
        pad,
        legend_top,
        fs,
        gap,
        &legend::SampleLines {
            width: 0.9 * pt,
            casing: 1.7 * pt,
        },
    );
    Ok(sc)
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

//! Outlines of footprints traced exactly along pixel boundaries.
//!
//! A footprint is the set of pixels carrying one id in a label map. Its boundary is made of
//! the unit edges between a pixel with the id and a pixel without it (or the outside of the
//! map). Each such edge is oriented with the footprint on its left (in a y-up frame), so the
//! edges join into closed rings: outer boundaries run counter-clockwise and holes clockwise.
//! Where two footprint pixels touch only at a corner the walk turns left, keeping the two
//! pixels apart (4-connectivity), so every edge is used exactly once whatever the shape.
//! Runs of collinear edges are merged: a ring keeps only the corners where it turns.
//!
//! Coordinates are pixel coordinates of the map: pixel (x, y) has its centre at (x, y), so
//! corners are at half-integers.

use ndarray::ArrayView2;
use std::collections::BTreeMap;

/// A closed ring of corners (the last corner joins the first).
pub type Ring = Vec<(f64, f64)>;

// Directions: 0 east (+x), 1 north (+y), 2 west, 3 south.
const DX: [i64; 4] = [1, 0, -1, 0];
const DY: [i64; 4] = [0, 1, 0, -1];

/// The pixel on the left of the unit edge leaving corner (vx, vy) in direction d; corner
/// (vx, vy) is the lower-left corner of pixel (vx, vy).
#[inline]
fn left_px(vx: i64, vy: i64, d: usize) -> (i64, i64) {
    match d {
        0 => (vx, vy),
        1 => (vx - 1, vy),
        2 => (vx - 1, vy - 1),
        _ => (vx, vy - 1),
    }
}

#[inline]
fn right_px(vx: i64, vy: i64, d: usize) -> (i64, i64) {
    match d {
        0 => (vx, vy - 1),
        1 => (vx, vy),
        2 => (vx - 1, vy),
        _ => (vx - 1, vy - 1),
    }
}

/// Traces every footprint (ids >= 0) of `labels` (rows = y). `offset` is added to every
/// corner, for tracing a window of a larger map. Returns the rings of each id, in the order
/// their first pixel is met scanning rows from y = 0.
pub fn trace_outlines(labels: ArrayView2<i32>, offset: (f64, f64)) -> BTreeMap<i32, Vec<Ring>> {
    trace_outlines_mapped(labels, offset, |l| l)
}

/// [`trace_outlines`] of the label map `relabel(labels)` without making it: each pixel's id
/// is `relabel` of its label (negative: no footprint), so a caller can trace some ids only,
/// or groups of ids, with no copy of a large map.
pub fn trace_outlines_mapped(
    labels: ArrayView2<i32>,
    offset: (f64, f64),
    relabel: impl Fn(i32) -> i32,
) -> BTreeMap<i32, Vec<Ring>> {
    let (h, w) = labels.dim();
    let (wi, hi) = (w as i64, h as i64);
    let lab = |x: i64, y: i64| -> i32 {
        if x < 0 || y < 0 || x >= wi || y >= hi {
            -1
        } else {
            relabel(labels[[y as usize, x as usize]])
        }
    };
    let is_edge = |vx: i64, vy: i64, d: usize, id: i32| -> bool {
        let (lx, ly) = left_px(vx, vy, d);
        let (rx, ry) = right_px(vx, vy, d);
        lab(lx, ly) == id && lab(rx, ry) != id
    };
    let stride = (w + 1) as i64;
    let mut seen = vec![0u8; (w + 1) * (h + 1)];
    let mut out: BTreeMap<i32, Vec<Ring>> = BTreeMap::new();
    let corner = |vx: i64, vy: i64| (vx as f64 - 0.5 + offset.0, vy as f64 - 0.5 + offset.1);

    for y in 0..hi {
        for x in 0..wi {
            let id = lab(x, y);
            if id < 0 {
                continue;
            }
            // The four sides of the pixel as directed edges with the pixel on their left.
            let sides = [
                (lab(x, y - 1) != id, x, y, 0usize),
                (lab(x + 1, y) != id, x + 1, y, 1),
                (lab(x, y + 1) != id, x + 1, y + 1, 2),
                (lab(x - 1, y) != id, x, y + 1, 3),
            ];
            for (boundary, sx, sy, sd) in sides {
                if !boundary || seen[(sy * stride + sx) as usize] & (1 << sd) != 0 {
                    continue;
                }
                let mut ring = Vec::new();
                let (mut vx, mut vy, mut d) = (sx, sy, sd);
                loop {
                    seen[(vy * stride + vx) as usize] |= 1 << d;
                    let (nx, ny) = (vx + DX[d], vy + DY[d]);
                    let left = (d + 1) % 4;
                    let right = (d + 3) % 4;
                    let nd = if is_edge(nx, ny, left, id) {
                        left
                    } else if is_edge(nx, ny, d, id) {
                        d
                    } else {
                        debug_assert!(is_edge(nx, ny, right, id));
                        right
                    };
                    if nd != d {
                        ring.push(corner(nx, ny));
                    }
                    vx = nx;
                    vy = ny;
                    d = nd;
                    if (vx, vy, d) == (sx, sy, sd) {
                        break;
                    }
                }
                out.entry(id).or_default().push(ring);
            }
        }
    }
    out
}

/// Signed area of a ring (positive for counter-clockwise in a y-up frame).
pub fn ring_area(r: &Ring) -> f64 {
    let n = r.len();
    let mut a = 0.0;
    for i in 0..n {
        let (x0, y0) = r[i];
        let (x1, y1) = r[(i + 1) % n];
        a += x0 * y1 - x1 * y0;
    }
    a / 2.0
}

/// A ring with the corners that matter at a tolerance of `eps` (same units as the ring): the
/// Douglas-Peucker reduction (Douglas & Peucker 1973, Cartographica 10, 112), applied to a
/// closed ring by splitting it at its first corner and the corner farthest from it. The kept
/// corners are corners of the ring, in its order, and every dropped corner lies within `eps`
/// of the segment between the kept corners around it. Used where a map pixel is smaller than
/// a pixel of the figure, so outlines carry no detail finer than the figure can show.
pub fn simplify_ring(ring: &[(f64, f64)], eps: f64) -> Ring {
    let n = ring.len();
    if n <= 3 {
        return ring.to_vec();
    }
    let d2 = |a: (f64, f64), b: (f64, f64)| (a.0 - b.0).powi(2) + (a.1 - b.1).powi(2);
    let far = (1..n)
        .fold((0, -1.0), |best, i| {
            let d = d2(ring[i], ring[0]);
            if d > best.1 { (i, d) } else { best }
        })
        .0;
    let mut keep = vec![false; n];
    keep[0] = true;
    keep[far] = true;
    // Spans (i, j) of ring indices, j up to n standing for corner 0 again.
    let mut spans = vec![(0usize, far), (far, n)];
    while let Some((i, j)) = spans.pop() {
        if j - i < 2 {
            continue;
        }
        let a = ring[i];
        let b = ring[j % n];
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let len2 = dx * dx + dy * dy;
        let (mut worst, mut at) = (-1.0, i);
        for (k, &p) in ring.iter().enumerate().take(j).skip(i + 1) {
            // Squared distance to the segment from a to b.
            let t = if len2 > 0.0 {
                (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / len2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let d = d2(p, (a.0 + t * dx, a.1 + t * dy));
            if d > worst {
                worst = d;
                at = k;
            }
        }
        if worst > eps * eps {
            keep[at] = true;
            spans.push((i, at));
            spans.push((at, j));
        }
    }
    ring.iter()
        .zip(&keep)
        .filter(|&(_, &k)| k)
        .map(|(&p, _)| p)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    /// Every corner the reduction drops lies within the tolerance of the segment between the
    /// kept corners around it, the kept corners are corners of the ring in its order, and a
    /// staircase finer than the tolerance keeps far fewer corners (the defining properties of
    /// Douglas & Peucker 1973).
    #[test]
    fn simplified_rings_stay_within_the_tolerance() {
        let mut state = 0x9e37_79b9_7f4a_7c15u64;
        let mut next = || {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 33) as f64 / (1u64 << 31) as f64
        };
        for case in 0..200 {
            let n = 4 + case % 60;
            let ring: Ring = (0..n)
                .map(|i| {
                    let a = std::f64::consts::TAU * i as f64 / n as f64;
                    let r = 10.0 + 3.0 * next();
                    (r * a.cos(), r * a.sin())
                })
                .collect();
            let eps = 0.1 + 2.0 * next();
            let s = simplify_ring(&ring, eps);
            assert!(s.len() >= 2 && s.len() <= ring.len());
            let idx: Vec<usize> = s
                .iter()
                .map(|p| ring.iter().position(|q| q == p).unwrap())
                .collect();
            assert!(idx.windows(2).all(|w| w[0] < w[1]), "order kept");
            for (w, &i) in idx.iter().enumerate() {
                let j = idx.get(w + 1).copied().unwrap_or(n);
                let (a, b) = (ring[i], ring[j % n]);
                for &p in &ring[i + 1..j] {
                    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
                    let t = (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / (dx * dx + dy * dy))
                        .clamp(0.0, 1.0);
                    let d = (p.0 - a.0 - t * dx).hypot(p.1 - a.1 - t * dy);
                    assert!(
                        d <= eps + 1e-12,
                        "dropped corner {p:?} is {d} from the ring"
                    );
                }
            }
        }
        // A diagonal staircase of unit steps, 0.2 of the tolerance each way.
        let mut stairs: Ring = Vec::new();
        for i in 0..50 {
            stairs.push((i as f64, i as f64));
            stairs.push((i as f64 + 1.0, i as f64));
        }
        stairs.push((50.0, 50.0));
        stairs.push((0.0, 50.0));
        let s = simplify_ring(&stairs, 5.0);
        assert!(s.len() <= 4, "{s:?}");
    }

    #[test]
    fn single_pixel_is_a_unit_square() {
        let l = array![[-1, -1, -1], [-1, 4, -1], [-1, -1, -1]];
        let r = trace_outlines(l.view(), (0.0, 0.0));
        assert_eq!(r.len(), 1);
        let rings = &r[&4];
        assert_eq!(rings.len(), 1);
        assert_eq!(rings[0].len(), 4);
        assert!((ring_area(&rings[0]) - 1.0).abs() < 1e-12);
        for &(x, y) in &rings[0] {
            assert!([0.5, 1.5].contains(&x) && [0.5, 1.5].contains(&y));
        }
    }

    #[test]
    fn hole_runs_clockwise_and_areas_add_up() {
        // A 3x3 block with its centre missing: outer ring area 9, hole area -1.
        let l = array![[2, 2, 2], [2, -1, 2], [2, 2, 2]];
        let r = &trace_outlines(l.view(), (0.0, 0.0))[&2];
        assert_eq!(r.len(), 2);
        let mut areas: Vec<f64> = r.iter().map(ring_area).collect();
        areas.sort_by(f64::total_cmp);
        assert_eq!(areas, vec![-1.0, 9.0]);
    }

    #[test]
    fn diagonal_neighbours_stay_separate() {
        let l = array![[1, -1], [-1, 1]];
        let r = &trace_outlines(l.view(), (0.0, 0.0))[&1];
        assert_eq!(r.len(), 2);
        assert!(r.iter().all(|ring| ring.len() == 4));
    }
}

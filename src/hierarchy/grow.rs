//! Watershed growth of leaf footprints down to a floor, and the grown leaves as structures of
//! their own (for measuring them over those footprints).

use super::engine::sort_key;
use super::{Hierarchy, Structure};
use ndarray::{Array2, ArrayView2};
use petgraph::graph::DiGraph;
use rayon::prelude::*;
use std::cmp::Reverse;
use std::collections::BinaryHeap;

/// Extends every leaf's footprint over the pixels that belong to no leaf, down to `floor`, by
/// a priority flood (watershed by flooding, Meyer 1994; Barnes et al. 2014 priority-flood).
///
/// Seeds are the pixels whose smallest structure is a leaf (labels from `h`). A queue holds
/// pixels ordered by value, highest first, ties by lower linear index; popping a pixel hands
/// its leaf id to each neighbour (connectivity of `h`) that has a value `>= floor`, is not NaN
/// and has no id yet, and queues that neighbour. An id is given once, when the pixel is first
/// reached, so the result is deterministic. Returns leaf ids, -1 where no leaf reaches. The
/// map must be the one `h` was built from.
pub fn grow_leaves(map: ArrayView2<f32>, h: &Hierarchy, floor: f64) -> Array2<i32> {
    let (nrows, ncols) = map.dim();
    assert_eq!(map.dim(), h.labels.dim(), "map and hierarchy shapes differ");
    let mut out = Array2::from_elem((nrows, ncols), -1i32);
    let mut heap: BinaryHeap<Reverse<u64>> = BinaryHeap::new();
    for ((y, x), &l) in h.labels.indexed_iter() {
        if l >= 0 && h.structures[l as usize].is_leaf() {
            out[(y, x)] = l;
            heap.push(Reverse(sort_key(map[(y, x)], y * ncols + x)));
        }
    }
    let offs = h.params.connectivity.offsets();
    while let Some(Reverse(key)) = heap.pop() {
        let p = key as u32 as usize;
        let (y, x) = (p / ncols, p % ncols);
        let l = out[(y, x)];
        for &(dy, dx) in offs {
            let yy = y as isize + dy;
            let xx = x as isize + dx;
            if yy < 0 || xx < 0 || yy as usize >= nrows || xx as usize >= ncols {
                continue;
            }
            let q = (yy as usize, xx as usize);
            let vq = map[q];
            if out[q] < 0 && !vq.is_nan() && vq as f64 >= floor {
                out[q] = l;
                heap.push(Reverse(sort_key(vq, q.0 * ncols + q.1)));
            }
        }
    }
    out
}

/// The leaves of a hierarchy over their grown footprints, as a hierarchy of their own, so that
/// the measurements and physics of ordinary structures apply to them unchanged.
#[derive(Debug, Clone)]
pub struct GrownLeaves {
    /// `ids[k]` is the id, in the hierarchy they were grown from, of structure `k` of
    /// [`GrownLeaves::hierarchy`]; increasing.
    pub ids: Vec<u32>,
    /// One structure per leaf, in the order of `ids`: a top-level leaf (no parent, no
    /// children, depth 0, merge level `None` so that its reference level is the floor) with
    /// the leaf's peak, and its moment sums, pixel count, lowest value and edge and missing
    /// flags gathered over the grown footprint. `labels` is the grown label plane with each
    /// leaf id replaced by its index `k`; `params` are those of the original hierarchy.
    pub hierarchy: Hierarchy,
}

/// The leaves of `h` over the footprints `grown` (from [`grow_leaves`] with `h`'s floor and
/// the same `map`; the plane is taken and relabelled in place).
///
/// The sums are gathered by the engine's own pass (`moments::fill`): rows in blocks whose
/// number depends only on the map size and the number of leaves, added in row order, so the
/// results are the same for any thread count.
pub fn grown_leaves_hierarchy(
    map: ArrayView2<f32>,
    h: &Hierarchy,
    mut grown: Array2<i32>,
) -> GrownLeaves {
    assert_eq!(map.dim(), grown.dim(), "map and grown plane shapes differ");
    let ids = h.leaves();
    if !grown.is_standard_layout() {
        grown = grown.as_standard_layout().into_owned();
    }
    let mut index = vec![-1i32; h.structures.len()];
    for (k, &id) in ids.iter().enumerate() {
        index[id as usize] = k as i32;
    }
    grown
        .as_slice_mut()
        .expect("an owned plane is in standard layout")
        .par_iter_mut()
        .for_each(|l| {
            if *l >= 0 {
                let k = index[*l as usize];
                assert!(
                    k >= 0,
                    "the grown plane holds structure {l}, which is not a leaf"
                );
                *l = k;
            }
        });
    let mut structures: Vec<Structure> = ids
        .iter()
        .enumerate()
        .map(|(k, &id)| {
            let s = &h.structures[id as usize];
            Structure {
                id: k as u32,
                parent: None,
                children: Vec::new(),
                peak_value: s.peak_value,
                peak_x: s.peak_x,
                peak_y: s.peak_y,
                merge_level: None,
                min_value: f64::NAN,
                npix: 0,
                npix_own: 0,
                sums: Default::default(),
                depth: 0,
                touches_edge: false,
                touches_missing: false,
            }
        })
        .collect();
    let data = map.as_standard_layout();
    let data = data.as_slice().expect("standard layout");
    let any_missing = data.par_iter().any(|v| v.is_nan());
    let labels = grown
        .as_slice()
        .expect("an owned plane is in standard layout");
    // No leaf has a parent here, so any order is children-first.
    let order: Vec<u32> = (0..structures.len() as u32).collect();
    super::moments::fill(
        data,
        map.ncols(),
        labels,
        h.params.connectivity,
        any_missing,
        &mut structures,
        &order,
    );
    let mut graph: DiGraph<u32, ()> = DiGraph::with_capacity(structures.len(), 0);
    for s in &structures {
        graph.add_node(s.id);
    }
    GrownLeaves {
        ids,
        hierarchy: Hierarchy {
            structures,
            labels: grown,
            graph,
            params: h.params,
        },
    }
}

//! Watershed growth of leaf footprints down to a floor.

use super::Hierarchy;
use super::engine::sort_key;
use ndarray::{Array2, ArrayView2};
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

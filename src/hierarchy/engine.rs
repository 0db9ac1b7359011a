//! The sweep: sort, union-find with on-the-fly simplification, then numbering and labels.

use super::{Hierarchy, HierarchyError, Params, Structure, moments, pages, radix};
use ndarray::{Array2, ArrayView2};
use petgraph::graph::{DiGraph, NodeIndex};
use rayon::prelude::*;
use std::borrow::Cow;
use std::sync::atomic::{AtomicU8, AtomicU32, Ordering};

/// Marks a union-find root; the low 31 bits then hold the component's open node.
const ROOT: u32 = 1 << 31;
/// No parent.
const NONE: u32 = u32::MAX;
/// How many pixels are swept between two progress calls.
const PROGRESS_STEP: usize = 1 << 20;

/// An order-preserving 32-bit image of a value (`-0.0` counts as `+0.0`; no NaN comes here).
#[inline]
pub(super) fn order_key(v: f32) -> u32 {
    let b = (v + 0.0).to_bits();
    // Negative: all bits flipped; otherwise the sign bit set. Without a branch, so that loops
    // over rows of pixels vectorise.
    b ^ (((b as i32 >> 31) as u32) | 0x8000_0000)
}

/// The value whose [`order_key`] is `k`.
#[inline]
pub(super) fn from_order_key(k: u32) -> f32 {
    f32::from_bits(if k & 0x8000_0000 != 0 {
        k & 0x7fff_ffff
    } else {
        !k
    })
}

/// The sort key of pixel `idx`: ascending keys visit higher values first, then lower indices.
#[inline]
pub(super) fn sort_key(v: f32, idx: usize) -> u64 {
    ((!order_key(v) as u64) << 32) | idx as u64
}

/// A candidate peak, branch or finished structure met during the sweep.
#[derive(Clone, Copy)]
struct Node {
    /// Node this one was absorbed into (itself when not absorbed).
    alias: u32,
    /// Linear index of the peak.
    peak: u32,
    /// Value of the peak.
    peak_val: f32,
    /// Parent node once the structure is closed, else `NONE`.
    parent: u32,
    /// For a branch, the value where it starts; NaN for a peak candidate.
    level: f32,
    /// Value where it was closed as a child (NaN while open).
    merge: f32,
}

/// Whether peak (va, ia) comes before peak (vb, ib) in the pixel order.
#[inline]
fn before(va: f32, ia: u32, vb: f32, ib: u32) -> bool {
    va > vb || (va == vb && ia < ib)
}

/// A cell of a pixel not visited yet.
const UNVISITED: u32 = u32::MAX;

/// The union-find root of pixel `x` (visited), halving the path on the way.
#[inline]
fn find(cells: &mut [u32], mut x: u32) -> u32 {
    loop {
        let px = cells[x as usize];
        if px & ROOT != 0 {
            return x;
        }
        let ppx = cells[px as usize];
        if ppx & ROOT != 0 {
            return px;
        }
        cells[x as usize] = ppx;
        x = ppx;
    }
}

/// Asks the processor to fetch the cache line holding `items[i]`.
#[inline(always)]
fn prefetch<T>(items: &[T], i: usize) {
    #[cfg(target_arch = "x86_64")]
    {
        let ptr = items[i..].as_ptr() as *const i8;
        // SAFETY: a prefetch is only a hint; it never faults and `ptr` points into `items`.
        #[allow(unused_unsafe)]
        unsafe {
            std::arch::x86_64::_mm_prefetch::<{ std::arch::x86_64::_MM_HINT_T0 }>(ptr)
        };
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = (items, i);
}

/// Builds the hierarchy of `map` (rows = y, columns = x; NaN = missing). See the module
/// documentation for the exact rules.
pub fn build(map: ArrayView2<f32>, params: &Params) -> Result<Hierarchy, HierarchyError> {
    build_with_progress(map, params, &|_| {})
}

/// [`build`], calling `progress` with the fraction done (0 to 1) a few dozen times per run
/// (about every 2^20 pixels swept), always from the calling thread.
pub fn build_with_progress(
    map: ArrayView2<f32>,
    params: &Params,
    progress: &dyn Fn(f64),
) -> Result<Hierarchy, HierarchyError> {
    build_impl(map, params, progress, &|| {}, PACK_LIMIT)
}

/// [`build_with_progress`] that also says when a core falls idle: `core_free` is called once,
/// during the sequential sweep, by the thread that sorts the buckets of keys ahead of the
/// sweep as soon as it has sorted the last one (typically a tenth of the way through the sweep
/// on large maps, a third on small ones), or from the calling thread as the sweep starts when
/// there is no such thread (a pool of one thread, or a single bucket). It is not called if the
/// build fails before the sweep. It should return promptly: work the caller starts from it on
/// a thread of its own then runs beside the sweep without taking a core from it.
pub fn build_with_hooks(
    map: ArrayView2<f32>,
    params: &Params,
    progress: &dyn Fn(f64),
    core_free: &(dyn Fn() + Sync),
) -> Result<Hierarchy, HierarchyError> {
    build_impl(map, params, progress, core_free, PACK_LIMIT)
}

/// Maps of up to this many pixels keep the whole value half in their keys (the packed layout);
/// larger ones use the wide layout (`radix::bucketed_keys_wide`).
const PACK_LIMIT: usize = 1 << 24;

/// [`build_with_progress`] with the packing limit as a parameter, so tests can run the path of
/// large maps (wide keys) on small ones.
pub(super) fn build_impl(
    map: ArrayView2<f32>,
    params: &Params,
    progress: &dyn Fn(f64),
    core_free: &(dyn Fn() + Sync),
    pack_limit: usize,
) -> Result<Hierarchy, HierarchyError> {
    let (nrows, ncols) = map.dim();
    let npix = nrows * ncols;
    if params.prominence.is_nan() || params.prominence < 0.0 {
        return Err(HierarchyError::BadProminence(params.prominence));
    }
    if params.floor.is_nan() {
        return Err(HierarchyError::BadFloor);
    }
    if params.min_area > npix {
        return Err(HierarchyError::MinAreaTooLarge {
            min_area: params.min_area,
            npix,
        });
    }
    if npix >= ROOT as usize {
        return Err(HierarchyError::MapTooLarge(npix));
    }
    let data: Cow<[f32]> = match map.as_slice() {
        Some(s) => Cow::Borrowed(s),
        None => Cow::Owned(map.iter().copied().collect()),
    };
    let data: &[f32] = &data;
    // The highest value, the lowest considered value and whether any pixel is valid or
    // missing, in one pass of simple loops that vectorise (a NaN never compares greater or
    // less, so it is never one of the two).
    let floor32 = radix::floor_f32(params.floor);
    let (max, low, any_valid, any_missing) = data
        .par_chunks(1 << 16)
        .map(|chunk| summary(chunk, floor32))
        .reduce(
            || (f32::NEG_INFINITY, f32::INFINITY, false, false),
            |a, b| (a.0.max(b.0), a.1.min(b.1), a.2 | b.2, a.3 | b.3),
        );
    if !any_valid {
        return Err(HierarchyError::NoValidPixels);
    }
    if params.floor > max as f64 {
        return Err(HierarchyError::FloorAboveMaximum {
            floor: params.floor,
            max: max as f64,
        });
    }
    progress(0.0);

    // 1. The keys of the pixel order, in buckets that the sweep sorts as it goes.
    let floor = params.floor;
    // Every key carries its pixel's earlier-neighbour byte (index << 8 | byte), so the sweep
    // reads it in order instead of from a scattered array; the bytes are made row by row as
    // the keys are scattered. Maps of up to 2^24 pixels keep the whole value half in the high
    // half of the key; larger ones keep only its bits below the bucket digit, so that their
    // longer indices fit (see `radix::bucketed_keys_wide`).
    let packed = npix <= pack_limit.min(PACK_LIMIT);
    // The highest value is considered (it is at least the floor, tested above).
    let range = Some((low, max));
    let rows = |y0: usize| {
        let mut rows = NeighbourRows::new(data, ncols, floor, params.connectivity, y0);
        move |out: &mut [u8]| rows.next_row(out)
    };
    let buckets = if packed {
        radix::bucketed_keys_packed(data, ncols, floor, range, &rows)
    } else {
        radix::bucketed_keys_wide(data, ncols, floor, range, &rows)
    };
    progress(super::SWEEP_STARTS);

    // 2. Sweep, sorting the buckets of keys on the way.
    let mut cells: Vec<u32> = pages::filled(npix, UNVISITED);
    let (nodes, areas, keys) = if packed {
        sweep::<true>(&mut cells, ncols, buckets, params, progress, core_free)
    } else {
        sweep::<false>(&mut cells, ncols, buckets, params, progress, core_free)
    };
    progress(0.9);

    // 3. Accepted structures, ids, labels.
    let nn = nodes.len();
    // The node each node was finally absorbed into (its alias root; itself if never
    // absorbed), by pointer jumping over a compact copy of the aliases: every round points
    // each node at its alias's alias, in parallel, until a round changes nothing. An alias
    // only ever points up its chain, so the result is each chain's root whatever the order
    // of the updates.
    let alias: Vec<AtomicU32> = nodes
        .par_iter()
        .map(|nd| AtomicU32::new(nd.alias))
        .collect();
    loop {
        let changed = alias
            .par_chunks(1 << 14)
            .map(|chunk| {
                let mut changed = false;
                for a in chunk {
                    let x = a.load(Ordering::Relaxed);
                    let y = alias[x as usize].load(Ordering::Relaxed);
                    if y != x {
                        a.store(y, Ordering::Relaxed);
                        changed = true;
                    }
                }
                changed
            })
            .reduce(|| false, |a, b| a | b);
        if !changed {
            break;
        }
    }
    let root_of = |n: u32| alias[n as usize].load(Ordering::Relaxed);
    // The nodes never absorbed, in increasing order (the structures, and components that
    // never met another or were closed without enough prominence or area: 7% of the nodes
    // of the 8192^2 bench map); everything else about the tree concerns them only.
    let alive: Vec<u32> = (0..nn as u32)
        .into_par_iter()
        .filter(|&n| root_of(n) == n)
        .collect();
    // What the rest needs of each: its area, its peak's value and its parent's alias root.
    let alive_nodes: Vec<(u32, f32, u32)> = alive
        .par_iter()
        .map(|&n| {
            let nd = &nodes[n as usize];
            let p = match nd.parent {
                NONE => NONE,
                p => root_of(p),
            };
            (areas[n as usize], nd.peak_val, p)
        })
        .collect();
    // The areas, read no more, now keep each such node's position in `alive` (later its id).
    let mut areas = areas;
    let slots = radix::Out(areas.as_mut_ptr());
    alive.par_iter().enumerate().for_each(|(i, &n)| {
        // SAFETY: the nodes of `alive` are distinct and below `areas.len()`, so the writes are
        // disjoint and in bounds.
        unsafe { slots.write(n as usize, i as u32) }
    });
    // The parent of each, as a position in `alive`.
    let parent: Vec<u32> = alive_nodes
        .par_iter()
        .map(|&(_, _, p)| if p == NONE { NONE } else { areas[p as usize] })
        .collect();
    let mut has_child = vec![false; alive.len()];
    for &p in &parent {
        if p != NONE {
            has_child[p as usize] = true;
        }
    }
    let accepted: Vec<bool> = (0..alive.len())
        .map(|i| {
            parent[i] != NONE
                || has_child[i]
                || (alive_nodes[i].1 as f64 - floor >= params.prominence
                    && alive_nodes[i].0 as usize >= params.min_area)
        })
        .collect();
    // Parents are always created after their children, so a descending sweep sees parents
    // first.
    let mut depth = vec![0u32; alive.len()];
    for i in (0..alive.len()).rev() {
        if accepted[i] && parent[i] != NONE {
            depth[i] = depth[parent[i] as usize] + 1;
        }
    }
    // Positions in `alive` of the accepted nodes, in id order.
    let mut order: Vec<u32> = (0..alive.len() as u32)
        .filter(|&i| accepted[i as usize])
        .collect();
    order.sort_unstable_by(|&a, &b| {
        let (na, nb) = (
            &nodes[alive[a as usize] as usize],
            &nodes[alive[b as usize] as usize],
        );
        sort_key(na.peak_val, na.peak as usize)
            .cmp(&sort_key(nb.peak_val, nb.peak as usize))
            .then(depth[a as usize].cmp(&depth[b as usize]))
    });
    let mut node_id = vec![-1i32; alive.len()];
    for (id, &i) in order.iter().enumerate() {
        node_id[i as usize] = id as i32;
    }
    // Each node's label: its alias root's id (-1 if not accepted).
    let slots = radix::Out(areas.as_mut_ptr());
    alive.par_iter().zip(&node_id).for_each(|(&n, &id)| {
        // SAFETY: as above.
        unsafe { slots.write(n as usize, id as u32) }
    });
    let label_of: Vec<i32> = alias
        .par_iter()
        .map(|a| areas[a.load(Ordering::Relaxed) as usize] as i32)
        .collect();
    drop(alias);
    drop(areas);
    // The cells become the labels. A pixel never visited still holds UNVISITED, which reads
    // as -1 (no structure); every visited pixel gets its label from the node the sweep left
    // beside its key.
    const _: () = assert!(UNVISITED as i32 == -1);
    let mut cells = std::mem::ManuallyDrop::new(cells);
    // SAFETY: u32 and i32 have the same size and alignment and every bit pattern is valid for
    // both, so the allocation is reused as is (and freed once, as the labels).
    let mut labels: Vec<i32> = unsafe {
        Vec::from_raw_parts(
            cells.as_mut_ptr() as *mut i32,
            cells.len(),
            cells.capacity(),
        )
    };
    let out = radix::Out(labels.as_mut_ptr());
    keys.par_chunks(1 << 16).for_each(|ks| {
        for &k in ks {
            // SAFETY: every pixel appears in at most one key, so the writes are disjoint and
            // in bounds.
            unsafe { out.write(k as u32 as usize, label_of[(k >> 32) as usize]) };
        }
    });
    drop(keys);

    let mut structures: Vec<Structure> = order
        .iter()
        .enumerate()
        .map(|(id, &i)| {
            let nd = &nodes[alive[i as usize] as usize];
            let p = parent[i as usize];
            let parent = (p != NONE).then(|| node_id[p as usize] as u32);
            Structure {
                id: id as u32,
                parent,
                children: Vec::new(),
                peak_value: nd.peak_val as f64,
                peak_x: nd.peak as usize % ncols,
                peak_y: nd.peak as usize / ncols,
                merge_level: parent.map(|_| nd.merge as f64),
                min_value: f64::NAN,
                npix: 0,
                npix_own: 0,
                sums: Default::default(),
                depth: depth[i as usize],
                touches_edge: false,
                touches_missing: false,
            }
        })
        .collect();
    for id in 0..structures.len() {
        if let Some(p) = structures[id].parent {
            structures[p as usize].children.push(id as u32);
        }
    }
    // Children before parents: increasing node index.
    let mut bottom_up: Vec<u32> = (0..order.len() as u32).collect();
    bottom_up.sort_unstable_by_key(|&id| order[id as usize]);
    drop(nodes);
    moments::fill(
        data,
        ncols,
        &labels,
        params.connectivity,
        any_missing,
        &mut structures,
        &bottom_up,
    );

    let mut graph: DiGraph<u32, ()> = DiGraph::with_capacity(structures.len(), structures.len());
    for s in &structures {
        graph.add_node(s.id);
    }
    for s in &structures {
        if let Some(p) = s.parent {
            graph.add_edge(
                NodeIndex::new(p as usize),
                NodeIndex::new(s.id as usize),
                (),
            );
        }
    }
    let labels = Array2::from_shape_vec((nrows, ncols), labels).expect("label shape");
    progress(1.0);
    Ok(Hierarchy {
        structures,
        labels,
        graph,
        params: *params,
    })
}

/// The highest value of `chunk`, its lowest value at or above `floor32` (infinite if none), and
/// whether it holds any valid and any missing (NaN) pixel. In eight independent lanes, which
/// the compiler turns into vector instructions (a NaN never compares greater or less, so it is
/// never one of the two values). The values do not depend on how the lanes are combined, but
/// for the sign of a zero, which the order keys ignore.
fn summary(chunk: &[f32], floor32: f32) -> (f32, f32, bool, bool) {
    const LANES: usize = 8;
    let mut max = [f32::NEG_INFINITY; LANES];
    let mut low = [f32::INFINITY; LANES];
    let mut nans = [0u32; LANES];
    // One value into a lane, without a branch.
    #[inline(always)]
    fn take(max: &mut f32, low: &mut f32, nans: &mut u32, v: f32, floor32: f32) {
        *max = if v > *max { v } else { *max };
        let c = if radix::considered(v, floor32) {
            v
        } else {
            f32::INFINITY
        };
        *low = if c < *low { c } else { *low };
        *nans += v.is_nan() as u32;
    }
    let mut lanes = chunk.chunks_exact(LANES);
    for vs in &mut lanes {
        for i in 0..LANES {
            take(&mut max[i], &mut low[i], &mut nans[i], vs[i], floor32);
        }
    }
    for (i, &v) in lanes.remainder().iter().enumerate() {
        take(&mut max[i], &mut low[i], &mut nans[i], v, floor32);
    }
    let nan_count: usize = nans.iter().map(|&n| n as usize).sum();
    (
        max.iter().fold(f32::NEG_INFINITY, |a, &b| a.max(b)),
        low.iter().fold(f32::INFINITY, |a, &b| a.min(b)),
        nan_count < chunk.len(),
        nan_count > 0,
    )
}

/// Steps in the linear index to the eight neighbours, in the order of the mask bits: the row
/// above (left, middle, right), left, right, the row below (left, middle, right).
fn neighbour_steps(ncols: usize) -> [isize; 8] {
    let w = ncols as isize;
    [-w - 1, -w, -w + 1, -1, 1, w - 1, w, w + 1]
}

/// Order keys as signed numbers (so that the comparisons of [`mask_row`] vectorise) for
/// pixels not considered: no considered pixel has it.
const OFF: i32 = i32::MIN;

/// The earlier-neighbour bytes of successive rows from a given one: for each considered pixel,
/// one bit per neighbour (order of [`neighbour_steps`]) that the sweep visits before it,
/// considered and earlier in the pixel order (higher value, or equal value and lower linear
/// index); zero for pixels not considered. They are made row by row while the keys are
/// scattered into their buckets and ride in the keys, so the sequential sweep reads one byte
/// in order instead of testing up to eight scattered cells. Keeps the signed order keys of
/// the rows above, here and below (each padded by one column of [`OFF`] on both sides).
pub(super) struct NeighbourRows<'a> {
    data: &'a [f32],
    ncols: usize,
    nrows: usize,
    floor32: f32,
    allowed: u8,
    /// The row the next call makes.
    y: usize,
    above: Vec<i32>,
    here: Vec<i32>,
    below: Vec<i32>,
}

impl<'a> NeighbourRows<'a> {
    /// Rows from `y0` on of the map `data` (`ncols` columns).
    pub(super) fn new(
        data: &'a [f32],
        ncols: usize,
        floor: f64,
        connectivity: super::Connectivity,
        y0: usize,
    ) -> Self {
        let mut rows = NeighbourRows {
            data,
            ncols,
            nrows: data.len() / ncols.max(1),
            floor32: radix::floor_f32(floor),
            allowed: match connectivity {
                super::Connectivity::Eight => 0xff,
                super::Connectivity::Four => 0b0101_1010,
            },
            y: y0,
            above: vec![OFF; ncols + 2],
            here: vec![OFF; ncols + 2],
            below: vec![OFF; ncols + 2],
        };
        if y0 > 0 {
            rows.key_row(y0 - 1, 0);
        }
        rows.key_row(y0, 1);
        rows
    }

    /// Fills buffer `which` (0 above, 1 here, 2 below) with the signed keys of row `y`.
    fn key_row(&mut self, y: usize, which: usize) {
        let (ncols, floor32) = (self.ncols, self.floor32);
        let buf = match which {
            0 => &mut self.above,
            1 => &mut self.here,
            _ => &mut self.below,
        };
        if y >= self.nrows {
            buf.fill(OFF);
            return;
        }
        buf[0] = OFF;
        buf[ncols + 1] = OFF;
        for (b, &v) in buf[1..=ncols]
            .iter_mut()
            .zip(&self.data[y * ncols..(y + 1) * ncols])
        {
            *b = if radix::considered(v, floor32) {
                (order_key(v) ^ 0x8000_0000) as i32
            } else {
                OFF
            };
        }
    }

    /// Writes the bytes of the next row into `out` (`ncols` long).
    pub(super) fn next_row(&mut self, out: &mut [u8]) {
        self.key_row(self.y + 1, 2);
        mask_row(out, &self.above, &self.here, &self.below, self.allowed);
        std::mem::swap(&mut self.above, &mut self.here);
        std::mem::swap(&mut self.here, &mut self.below);
        self.y += 1;
    }
}

/// Offsets (x, y) of the neighbours, in the order of the mask bits ([`neighbour_steps`]).
const NEIGHBOUR_XY: [(i32, i32); 8] = [
    (-1, -1),
    (0, -1),
    (1, -1),
    (-1, 0),
    (1, 0),
    (-1, 1),
    (0, 1),
    (1, 1),
];

/// For each byte of earlier neighbours, one neighbour per group of them that are adjacent to
/// each other (directly or through others of the byte), lowest bit first: `[count, bits..]`.
///
/// Two visited pixels that are adjacent always lie in the same component (the later one was
/// joined to the earlier when it was visited), so the sweep needs the union-find root of only
/// one neighbour per group. With 8-connectivity the eight neighbours form a ring, and a run of
/// earlier neighbours along it is one group: most pixels need one lookup instead of about
/// four. The groups are taken in the order of their lowest bit, so the roots are met in the
/// same order as when every neighbour is looked up.
const fn neighbour_groups(eight: bool) -> [[u8; 5]; 256] {
    let mut table = [[0u8; 5]; 256];
    let mut mask = 0;
    while mask < 256 {
        // Smallest-bit representative of each bit's group, by repeated relaxation.
        let mut rep = [0u8; 8];
        let mut i = 0;
        while i < 8 {
            rep[i] = i as u8;
            i += 1;
        }
        let mut changed = true;
        while changed {
            changed = false;
            let mut a = 0;
            while a < 8 {
                let mut b = 0;
                while b < 8 {
                    let (dx, dy) = (
                        NEIGHBOUR_XY[a].0 - NEIGHBOUR_XY[b].0,
                        NEIGHBOUR_XY[a].1 - NEIGHBOUR_XY[b].1,
                    );
                    let (dx, dy) = (if dx < 0 { -dx } else { dx }, if dy < 0 { -dy } else { dy });
                    let adjacent = if eight {
                        dx <= 1 && dy <= 1 && dx + dy > 0
                    } else {
                        dx + dy == 1
                    };
                    if mask & (1 << a) != 0 && mask & (1 << b) != 0 && adjacent && rep[b] < rep[a] {
                        rep[a] = rep[b];
                        changed = true;
                    }
                    b += 1;
                }
                a += 1;
            }
        }
        let mut n = 0;
        let mut a = 0;
        while a < 8 {
            if mask & (1 << a) != 0 && rep[a] == a as u8 {
                table[mask][1 + n] = a as u8;
                n += 1;
            }
            a += 1;
        }
        table[mask][0] = n as u8;
        mask += 1;
    }
    table
}

/// [`neighbour_groups`] for 8-connectivity.
static GROUPS_EIGHT: [[u8; 5]; 256] = neighbour_groups(true);
/// [`neighbour_groups`] for 4-connectivity (no two of the four neighbours are adjacent).
static GROUPS_FOUR: [[u8; 5]; 256] = neighbour_groups(false);

/// One row of earlier-neighbour bytes ([`NeighbourRows`]) from the signed keys of the rows
/// above, here and below (each padded by one column on both sides): sixteen pixels at a time
/// with SSE2 (part of every x86-64 processor), the rest by [`mask_row_scalar`], which gives
/// the same bytes (unit test).
fn mask_row(row: &mut [u8], above: &[i32], here: &[i32], below: &[i32], allowed: u8) {
    let n = row.len();
    let (a, h, b) = (&above[..n + 2], &here[..n + 2], &below[..n + 2]);
    #[cfg(target_arch = "x86_64")]
    let done = {
        use std::arch::x86_64::*;
        let full = n / 16 * 16;
        // SAFETY: SSE2 is part of x86-64. Every load reads 4 lanes at x + g * 4 + {0, 1, 2}
        // with x + 16 <= full <= n, so at most index n + 1 < n + 2 of the padded rows, and
        // every store writes row[x..x + 16] with x + 16 <= n.
        unsafe {
            let one = |v: i32| _mm_set1_epi32(v);
            let keep = _mm_set1_epi32(allowed as i32);
            let off = _mm_set1_epi32(i32::MIN);
            let load = |s: &[i32], i: usize| _mm_loadu_si128(s.as_ptr().add(i) as *const __m128i);
            let group = |x: usize| {
                let kp = load(h, x + 1);
                // a >= kp is !(kp > a): and-not with the bit; b > kp is a plain comparison.
                let mut bits = _mm_andnot_si128(_mm_cmpgt_epi32(kp, load(a, x)), one(1));
                bits = _mm_or_si128(
                    bits,
                    _mm_andnot_si128(_mm_cmpgt_epi32(kp, load(a, x + 1)), one(2)),
                );
                bits = _mm_or_si128(
                    bits,
                    _mm_andnot_si128(_mm_cmpgt_epi32(kp, load(a, x + 2)), one(4)),
                );
                bits = _mm_or_si128(
                    bits,
                    _mm_andnot_si128(_mm_cmpgt_epi32(kp, load(h, x)), one(8)),
                );
                bits = _mm_or_si128(
                    bits,
                    _mm_and_si128(_mm_cmpgt_epi32(load(h, x + 2), kp), one(16)),
                );
                bits = _mm_or_si128(
                    bits,
                    _mm_and_si128(_mm_cmpgt_epi32(load(b, x), kp), one(32)),
                );
                bits = _mm_or_si128(
                    bits,
                    _mm_and_si128(_mm_cmpgt_epi32(load(b, x + 1), kp), one(64)),
                );
                bits = _mm_or_si128(
                    bits,
                    _mm_and_si128(_mm_cmpgt_epi32(load(b, x + 2), kp), one(128)),
                );
                // A pixel not considered (kp = i32::MIN) gets 0.
                _mm_and_si128(bits, _mm_andnot_si128(_mm_cmpeq_epi32(kp, off), keep))
            };
            let mut x = 0;
            while x < full {
                let lo = _mm_packs_epi32(group(x), group(x + 4));
                let hi = _mm_packs_epi32(group(x + 8), group(x + 12));
                _mm_storeu_si128(
                    row.as_mut_ptr().add(x) as *mut __m128i,
                    _mm_packus_epi16(lo, hi),
                );
                x += 16;
            }
        }
        full
    };
    #[cfg(not(target_arch = "x86_64"))]
    let done = 0;
    mask_row_scalar(
        &mut row[done..],
        &a[done..],
        &h[done..],
        &b[done..],
        allowed,
    );
}

/// [`mask_row`] one pixel at a time.
fn mask_row_scalar(row: &mut [u8], above: &[i32], here: &[i32], below: &[i32], allowed: u8) {
    let n = row.len();
    let (a, h, b) = (&above[..n + 2], &here[..n + 2], &below[..n + 2]);
    for x in 0..n {
        let kp = h[x + 1];
        let bits = (a[x] >= kp) as u8
            | ((a[x + 1] >= kp) as u8) << 1
            | ((a[x + 2] >= kp) as u8) << 2
            | ((h[x] >= kp) as u8) << 3
            | ((h[x + 2] > kp) as u8) << 4
            | ((b[x] > kp) as u8) << 5
            | ((b[x + 1] > kp) as u8) << 6
            | ((b[x + 2] > kp) as u8) << 7;
        // A pixel not considered (kp = i32::MIN) would see every neighbour as "earlier".
        row[x] = if kp == i32::MIN { 0 } else { bits & allowed };
    }
}

/// How many pixels ahead the sweep prefetches.
const AHEAD: usize = 32;
/// How many pixels ahead the sweep of a large map prefetches the parents of the neighbours'
/// cells (a second stage after [`AHEAD`]; 8 and 12 measured alike, better than none).
const AHEAD2: usize = 12;
/// How many pixels ahead the sweep of a large map prefetches the nodes and areas that a merge
/// at that pixel would read (a third stage; 8 measured better than 6 or 10).
const AHEAD3: usize = 8;

/// A bucket of keys not sorted yet.
const UNSORTED: u8 = 0;
/// A bucket some thread is sorting.
const SORTING: u8 = 1;
/// A bucket sorted, which the sweep may read.
const SORTED: u8 = 2;

/// The buckets of keys shared by the sweep and the thread that sorts ahead of it. A bucket is
/// sorted by whichever thread claims it first; the sweep reads a bucket only once it is
/// sorted, and the sorting thread touches only the buckets it claimed, so no position is ever
/// used by both at once.
struct Pipeline<'a> {
    keys: radix::Out<u64>,
    starts: &'a [usize],
    state: Vec<AtomicU8>,
    bits: radix::KeyBits,
}

impl Pipeline<'_> {
    /// Sorts bucket `b` if no thread has claimed it yet.
    fn try_sort(&self, b: usize, scratch: &mut Vec<u64>) {
        if self.state[b]
            .compare_exchange(UNSORTED, SORTING, Ordering::Acquire, Ordering::Relaxed)
            .is_ok()
        {
            let (a, e) = (self.starts[b], self.starts[b + 1]);
            // SAFETY: the claim above makes this thread the only one using bucket `b` until
            // it is marked sorted; the buckets are disjoint ranges inside the keys.
            let bucket = unsafe { std::slice::from_raw_parts_mut(self.keys.0.add(a), e - a) };
            radix::sort_bucket(bucket, self.bits, scratch);
            self.state[b].store(SORTED, Ordering::Release);
        }
    }

    /// Returns once bucket `b` is sorted, sorting it here if no thread has claimed it, and
    /// meanwhile the next one if the other thread is still sorting `b`.
    fn wait(&self, b: usize, scratch: &mut Vec<u64>) {
        let mut spins = 0u32;
        loop {
            match self.state[b].load(Ordering::Acquire) {
                SORTED => return,
                UNSORTED => self.try_sort(b, scratch),
                _ => {
                    if spins == 0 && b + 1 < self.state.len() {
                        self.try_sort(b + 1, scratch);
                    }
                    spins += 1;
                    if spins.is_multiple_of(64) {
                        std::thread::yield_now();
                    } else {
                        std::hint::spin_loop();
                    }
                }
            }
        }
    }

    fn is_sorted(&self, b: usize) -> bool {
        self.state[b].load(Ordering::Acquire) == SORTED
    }
}

/// Visits the pixels in key order, merging components and simplifying on the fly, while
/// another thread (when the pool has more than one) sorts the buckets of keys ahead of it.
/// `cells` holds [`UNVISITED`] for every pixel on entry. Returns the nodes, their areas and
/// the keys, whose high half then holds the open node of each pixel's component when the
/// pixel was visited.
///
/// Each pixel has one 32-bit cell: [`UNVISITED`], its union-find parent, or `ROOT | open
/// node` at a component root. Small cells keep as much of the map as possible in cache, as
/// the order of the sweep is spatially random; the visiting node goes beside the key, which
/// is read in order anyway.
fn sweep<const PACKED: bool>(
    cells: &mut [u32],
    ncols: usize,
    buckets: radix::Buckets,
    params: &Params,
    progress: &dyn Fn(f64),
    core_free: &(dyn Fn() + Sync),
) -> (Vec<Node>, Vec<u32>, Vec<u64>) {
    let radix::Buckets {
        mut keys,
        starts,
        peaks,
        bits,
    } = buckets;
    let nb = starts.len() - 1;
    let pipe = Pipeline {
        keys: radix::Out(keys.as_mut_ptr()),
        starts: &starts,
        state: (0..nb).map(|_| AtomicU8::new(UNSORTED)).collect(),
        bits,
    };
    // Every node starts a component at a pixel with no earlier neighbour (`peaks` of them) or
    // joins two or more components into one (fewer than `peaks`), so `2 peaks` is room
    // enough; about 99.5% of the nodes of the synthetic maps are of the first kind, so a little
    // more than `peaks` of them are faulted in before the sweep.
    let (cap, touch) = (2 * peaks, peaks + peaks / 64 + 64);
    let nodes: Vec<Node> = pages::reserved(
        cap,
        touch,
        Node {
            alias: 0,
            peak: 0,
            peak_val: 0.0,
            parent: NONE,
            level: 0.0,
            merge: 0.0,
        },
    );
    // The areas apart from the nodes: the sweep touches a component's area at every pixel and
    // the rest of its node only at merges, so the areas stay dense in cache.
    let areas: Vec<u32> = pages::reserved(cap, touch, 0);
    let (nodes, areas) = rayon::in_place_scope(|scope| {
        if nb > 1 && rayon::current_num_threads() > 1 {
            scope.spawn(|_| {
                let mut scratch = Vec::new();
                for b in 0..nb {
                    pipe.try_sort(b, &mut scratch);
                }
                core_free();
            });
        } else {
            core_free();
        }
        sweep_sorted::<PACKED>(cells, ncols, &pipe, params, progress, nodes, areas)
    });
    (nodes, areas, keys)
}

/// The sweep proper: the buckets of `pipe` in order, each once it is sorted. `nodes` and
/// `areas` come empty, with room reserved.
fn sweep_sorted<const PACKED: bool>(
    cells: &mut [u32],
    ncols: usize,
    pipe: &Pipeline,
    params: &Params,
    progress: &dyn Fn(f64),
    mut nodes: Vec<Node>,
    mut areas: Vec<u32>,
) -> (Vec<Node>, Vec<u32>) {
    let npix = cells.len();
    let min_area = params.min_area;
    let prominence = params.prominence;
    let delta = neighbour_steps(ncols);
    let groups = match params.connectivity {
        super::Connectivity::Eight => &GROUPS_EIGHT,
        super::Connectivity::Four => &GROUPS_FOUR,
    };
    let starts = pipe.starts;
    let nb = starts.len() - 1;
    let nkeys = starts[nb];
    let keys = pipe.keys.0;
    // The pixel of a key (its index sits above the byte of earlier neighbours, below any
    // value bits, in both layouts).
    let index_mask = (1u64 << radix::index_bits(npix)) - 1;
    let pixel = |key: u64| ((key >> 8) & index_mask) as usize;
    // Of the pixel whose key is at `i` (below the readable limit): its index and the groups
    // of its earlier neighbours.
    let ahead_groups = |i: usize| {
        // SAFETY: the callers read only keys below `limit`, in sorted buckets that no other
        // thread writes.
        let k = unsafe { keys.add(i).read() };
        (pixel(k), &groups[k as u8 as usize])
    };
    let bits = pipe.bits;
    let mut scratch = Vec::new();
    for b in 0..nb {
        pipe.wait(b, &mut scratch);
        // Keys may be read ahead as far as the buckets known to be sorted reach.
        let limit = if b + 1 < nb && pipe.is_sorted(b + 1) {
            starts[b + 2]
        } else {
            starts[b + 1]
        };
        for step in starts[b]..starts[b + 1] {
            if step % PROGRESS_STEP == 0 && step > 0 {
                progress(super::SWEEP_STARTS + 0.6 * step as f64 / nkeys as f64);
            }
            if step + AHEAD < limit {
                // SAFETY: in bounds and in a sorted bucket, which no other thread writes.
                let q = pixel(unsafe { keys.add(step + AHEAD).read() });
                prefetch(cells, q.saturating_sub(ncols));
                prefetch(cells, q);
                prefetch(cells, (q + ncols).min(npix - 1));
            }
            if !PACKED && step + AHEAD2 < limit {
                // The cells of the earlier neighbours of a pixel a few steps ahead are in
                // cache by now: fetch what its lookups will read next, the parent of each
                // (or the area of its node at a root). Measured to help only on maps above
                // 2^24 pixels (wide keys; 8192^2: the sweep's median of 12 interleaved runs
                // 1.56 s against 1.80 s); on smaller ones those reads mostly hit the cache and
                // the extra work costs 10-20%.
                let (q, group) = ahead_groups(step + AHEAD2);
                for &j in &group[1..=group[0] as usize] {
                    let c = cells[q.wrapping_add(delta[j as usize] as usize)];
                    if c & ROOT == 0 {
                        prefetch(cells, c as usize);
                    } else if ((c & !ROOT) as usize) < areas.len() {
                        prefetch(&areas, (c & !ROOT) as usize);
                    }
                }
            }
            if !PACKED && step + AHEAD3 < limit {
                // A pixel a little nearer whose earlier neighbours form two or more groups
                // may join components: the roots' cells are in cache by now, so fetch the node
                // and area of each root that the merge would read (the merge test's reads
                // were the sweep's costliest at 8192^2). The sweep's median of 15 interleaved
                // runs there: 1.84 s against 2.05 s without this stage.
                let (q, group) = ahead_groups(step + AHEAD3);
                if group[0] >= 2 {
                    for &j in &group[1..=group[0] as usize] {
                        let mut c = cells[q.wrapping_add(delta[j as usize] as usize)];
                        if c & ROOT == 0 {
                            c = cells[c as usize];
                        }
                        let n = (c & !ROOT) as usize;
                        if c & ROOT != 0 && n < nodes.len() {
                            prefetch(&nodes, n);
                            prefetch(&areas, n);
                        }
                    }
                }
            }
            // SAFETY: as above; bucket `b` is sorted and only this thread uses it now.
            let key = unsafe { keys.add(step).read() };
            let (p, mask) = (pixel(key), key as u8);
            let v = from_order_key(!bits.value_half(b, key));
            // Distinct components among the neighbours visited before p (the bits of its mask),
            // one lookup per group of adjacent ones.
            let mut roots = [0u32; 4];
            let mut k = 0usize;
            let group = &groups[mask as usize];
            for &j in &group[1..=group[0] as usize] {
                let q = p.wrapping_add(delta[j as usize] as usize);
                let r = find(cells, q as u32);
                if !roots[..k].contains(&r) {
                    roots[k] = r;
                    k += 1;
                }
            }
            let (link_p, node_p) = match k {
                0 => {
                    let n = nodes.len() as u32;
                    areas.push(1);
                    nodes.push(Node {
                        alias: n,
                        peak: p as u32,
                        peak_val: v,
                        parent: NONE,
                        level: f32::NAN,
                        merge: f32::NAN,
                    });
                    (ROOT | n, n)
                }
                1 => {
                    let r = roots[0];
                    let n = cells[r as usize] & !ROOT;
                    areas[n as usize] += 1;
                    (r, n)
                }
                _ => {
                    // Union by size: the largest component's root stays the root.
                    let mut big = roots[0];
                    let mut big_area = 0u32;
                    for &r in &roots[..k] {
                        let a = areas[(cells[r as usize] & !ROOT) as usize];
                        if a > big_area {
                            big_area = a;
                            big = r;
                        }
                    }
                    let t = merge(
                        cells,
                        &mut nodes,
                        &mut areas,
                        &roots[..k],
                        v,
                        min_area,
                        prominence,
                    );
                    for &r in &roots[..k] {
                        if r != big {
                            cells[r as usize] = big;
                        }
                    }
                    cells[big as usize] = ROOT | t;
                    (big, t)
                }
            };
            cells[p] = link_p;
            // SAFETY: as above.
            unsafe { keys.add(step).write(((node_p as u64) << 32) | p as u64) };
        }
    }
    (nodes, areas)
}

/// Joins the components rooted at `roots` at pixel value `v`; returns the open node of the
/// joined component (with its area counting the new pixel). Areas of the old open nodes are
/// left untouched for the caller's union by size.
fn merge(
    cells: &[u32],
    nodes: &mut Vec<Node>,
    areas: &mut Vec<u32>,
    roots: &[u32],
    v: f32,
    min_area: usize,
    prominence: f64,
) -> u32 {
    let mut open = [0u32; 8];
    let mut sig = [false; 8];
    let k = roots.len();
    let mut nsig = 0;
    let mut total: u32 = 1;
    let mut best = 0usize; // index of the best peak among all
    let mut best_sig: Option<usize> = None; // best peak among significant
    let mut best_same: Option<usize> = None; // best peak among same-level branches
    for i in 0..k {
        let n = cells[roots[i] as usize] & !ROOT;
        open[i] = n;
        let nd = &nodes[n as usize];
        let area = areas[n as usize];
        total += area;
        let pv = nd.peak_val;
        sig[i] = area as usize >= min_area && pv > v && pv as f64 - v as f64 >= prominence;
        let better = |j: usize, nodes: &Vec<Node>| {
            let o = &nodes[open[j] as usize];
            before(pv, nd.peak, o.peak_val, o.peak)
        };
        if i > 0 && better(best, nodes) {
            best = i;
        }
        if sig[i] {
            nsig += 1;
            if best_sig.is_none_or(|j| better(j, nodes)) {
                best_sig = Some(i);
            }
            if nd.level == v && best_same.is_none_or(|j| better(j, nodes)) {
                best_same = Some(i);
            }
        }
    }
    let top = nodes[open[best] as usize];
    let t = if nsig >= 2 {
        let t = match best_same {
            Some(i) => open[i],
            None => {
                let t = nodes.len() as u32;
                areas.push(0);
                nodes.push(Node {
                    alias: t,
                    peak: top.peak,
                    peak_val: top.peak_val,
                    parent: NONE,
                    level: v,
                    merge: f32::NAN,
                });
                t
            }
        };
        for i in 0..k {
            let n = open[i];
            if n == t {
                continue;
            }
            let nd = &mut nodes[n as usize];
            if sig[i] && nd.level != v {
                nd.parent = t;
                nd.merge = v;
            } else {
                nd.alias = t;
            }
        }
        t
    } else {
        let t = match best_sig {
            Some(i) => open[i],
            None => open[best],
        };
        for &n in &open[..k] {
            if n != t {
                nodes[n as usize].alias = t;
            }
        }
        t
    };
    let nd = &mut nodes[t as usize];
    areas[t as usize] = total;
    nd.peak = top.peak;
    nd.peak_val = top.peak_val;
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The order key equals its definition (negative values: all bits flipped; others: the sign
    /// bit set) and orders like the values, on every sign and exponent and on random bits.
    #[test]
    fn order_key_is_the_flipped_or_signed_bit_pattern() {
        let mut next = crate::hierarchy::test_lcg(11);
        let mut vals = vec![0.0f32, -0.0, 1.0, -1.0, f32::MAX, f32::MIN, f32::INFINITY];
        vals.extend([
            f32::NEG_INFINITY,
            f32::MIN_POSITIVE,
            -f32::MIN_POSITIVE,
            1e-45,
            -1e-45,
        ]);
        for _ in 0..100_000 {
            let v = f32::from_bits((next() >> 32) as u32);
            if !v.is_nan() {
                vals.push(v);
            }
        }
        for &v in &vals {
            let b = (v + 0.0).to_bits();
            let want = if b & 0x8000_0000 != 0 {
                !b
            } else {
                b | 0x8000_0000
            };
            assert_eq!(order_key(v), want, "{v:e}");
            assert_eq!(from_order_key(order_key(v)), v + 0.0);
        }
        for w in vals.windows(2) {
            assert_eq!(
                order_key(w[0]).cmp(&order_key(w[1])),
                (w[0] + 0.0).partial_cmp(&(w[1] + 0.0)).unwrap(),
                "{:e} {:e}",
                w[0],
                w[1]
            );
        }
    }

    /// The lane-wise summary of a chunk equals a plain pass over it, on chunks of every length
    /// up to 40 with NaNs, infinities, signed zeros and values on both sides of the floor.
    #[test]
    fn chunk_summary_equals_a_plain_pass() {
        let mut next = crate::hierarchy::test_lcg(5);
        for len in 0..40 {
            for round in 0..50 {
                let chunk: Vec<f32> = (0..len)
                    .map(|_| match next() % 9 {
                        0 => f32::NAN,
                        1 => f32::INFINITY,
                        2 => f32::NEG_INFINITY,
                        3 => -0.0,
                        _ => (next() % 1000) as f32 / 100.0 - 5.0,
                    })
                    .collect();
                let floor32 = [0.0f32, -2.5, 4.0, f32::INFINITY][round % 4];
                let (mut max, mut low) = (f32::NEG_INFINITY, f32::INFINITY);
                for &v in &chunk {
                    if v > max {
                        max = v;
                    }
                    if v >= floor32 && v < low {
                        low = v;
                    }
                }
                let want = (
                    max,
                    low,
                    chunk.iter().any(|v| !v.is_nan()),
                    chunk.iter().any(|v| v.is_nan()),
                );
                let got = summary(&chunk, floor32);
                // Which zero a signed zero yields depends on the order of comparisons; the
                // order keys count both as +0.0 (`order_key`), so they are compared as one.
                let bits = |v: f32| (v + 0.0).to_bits();
                assert_eq!(
                    (bits(got.0), bits(got.1), got.2, got.3),
                    (bits(want.0), bits(want.1), want.2, want.3),
                    "{chunk:?} floor {floor32}"
                );
            }
        }
    }

    /// The vectorised neighbour bytes equal those made one pixel at a time, on rows of every
    /// length up to 70 with few distinct keys (many ties), pixels not considered, and the
    /// extreme keys.
    #[test]
    fn vectorised_neighbour_bytes_equal_the_scalar_ones() {
        let mut lcg = crate::hierarchy::test_lcg(7);
        let mut next = || (lcg() >> 33) as u32;
        for n in 0..70 {
            for round in 0..20 {
                let mut key = || match next() % 8 {
                    0 => OFF,
                    1 => i32::MAX,
                    2 => i32::MIN + 1,
                    _ => (next() % (2 + round)) as i32 - 3,
                };
                let rows: Vec<Vec<i32>> = (0..3)
                    .map(|_| (0..n + 2).map(|_| key()).collect())
                    .collect();
                for allowed in [0xff, 0b0101_1010] {
                    let mut fast = vec![0u8; n];
                    let mut slow = vec![0u8; n];
                    mask_row(&mut fast, &rows[0], &rows[1], &rows[2], allowed);
                    mask_row_scalar(&mut slow, &rows[0], &rows[1], &rows[2], allowed);
                    assert_eq!(fast, slow, "n {n} round {round} allowed {allowed:08b}");
                }
            }
        }
    }

    /// The groups of every neighbour byte, against a flood fill over the 3 x 3 neighbourhood.
    #[test]
    fn neighbour_groups_are_the_connected_runs_of_the_byte() {
        for (eight, table) in [(true, &GROUPS_EIGHT), (false, &GROUPS_FOUR)] {
            for (mask, g) in table.iter().enumerate() {
                let mut seen = 0u32;
                let mut firsts = Vec::new();
                for start in 0..8 {
                    if mask & (1 << start) == 0 || seen & (1 << start) != 0 {
                        continue;
                    }
                    firsts.push(start as u8);
                    let mut stack = vec![start];
                    seen |= 1 << start;
                    while let Some(a) = stack.pop() {
                        let (ax, ay) = NEIGHBOUR_XY[a];
                        for (b, &(bx, by)) in NEIGHBOUR_XY.iter().enumerate() {
                            let (dx, dy) = ((ax - bx).abs(), (ay - by).abs());
                            let touching = if eight { dx.max(dy) == 1 } else { dx + dy == 1 };
                            if touching && mask & (1 << b) != 0 && seen & (1 << b) == 0 {
                                seen |= 1 << b;
                                stack.push(b);
                            }
                        }
                    }
                }
                assert_eq!(&g[1..=g[0] as usize], &firsts[..], "mask {mask:08b}");
            }
        }
        // A full ring is one group; the four corners alone are four.
        assert_eq!(GROUPS_EIGHT[0xff][..2], [1, 0]);
        assert_eq!(GROUPS_EIGHT[0b1010_0101][..5], [4, 0, 2, 5, 7]);
    }
}

//! The sweep: sort, union-find with on-the-fly simplification, then numbering and labels.

use super::{Hierarchy, HierarchyError, Params, Structure, moments, pages, radix};
use ndarray::{Array2, ArrayView2};
use petgraph::graph::{DiGraph, NodeIndex};
use rayon::prelude::*;
use std::borrow::Cow;
use std::sync::atomic::{AtomicU8, AtomicU32, AtomicU64, AtomicUsize, Ordering};

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
    let pieces: Vec<Summary> = data
        .par_chunks(SUMMARY_PIECE)
        .map(|chunk| summary(chunk, floor32))
        .collect();
    let (mut max, mut low, mut any_valid, mut any_missing) =
        (f32::NEG_INFINITY, f32::INFINITY, false, false);
    for pc in &pieces {
        max = max.max(pc.max);
        low = low.min(pc.low);
        any_valid |= pc.any_valid;
        any_missing |= pc.any_missing;
    }
    // Where the two-part sweep cuts the map: the row where half the considered pixels lie
    // above (to a piece of the first pass).
    let total: usize = pieces.iter().map(|pc| pc.considered).sum();
    let mut seen = 0;
    let half_at = pieces
        .iter()
        .position(|pc| {
            seen += pc.considered;
            2 * seen >= total
        })
        .unwrap_or(0);
    let seam_row = (half_at * SUMMARY_PIECE / ncols.max(1)).clamp(1, nrows.max(2) - 1);
    drop(pieces);
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
    let Swept {
        nodes,
        areas,
        keys,
        born,
    } = if packed {
        sweep::<true>(
            &mut cells, ncols, seam_row, buckets, params, progress, core_free,
        )
    } else {
        sweep::<false>(
            &mut cells, ncols, seam_row, buckets, params, progress, core_free,
        )
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
    let mut alive: Vec<u32> = (0..nn as u32)
        .into_par_iter()
        .filter(|&n| root_of(n) == n && !nodes[n as usize].peak_val.is_nan())
        .collect();
    if !born.is_empty() {
        // The two-part sweep numbers its nodes by part: put them back in the order they were
        // made, that of the keys of the pixels where they were made (no two nodes are made at
        // one pixel), which is the whole sweep's numbering.
        alive.par_sort_unstable_by_key(|&n| {
            let p = born[n as usize] as usize;
            sort_key(data[p], p)
        });
    }
    drop(born);
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
fn summary(chunk: &[f32], floor32: f32) -> Summary {
    const LANES: usize = 8;
    let mut max = [f32::NEG_INFINITY; LANES];
    let mut low = [f32::INFINITY; LANES];
    let mut nans = [0u32; LANES];
    let mut count = [0u32; LANES];
    // One value into a lane, without a branch.
    #[inline(always)]
    fn take(max: &mut f32, low: &mut f32, nans: &mut u32, count: &mut u32, v: f32, floor32: f32) {
        *max = if v > *max { v } else { *max };
        let yes = radix::considered(v, floor32);
        let c = if yes { v } else { f32::INFINITY };
        *low = if c < *low { c } else { *low };
        *nans += v.is_nan() as u32;
        *count += yes as u32;
    }
    let mut lanes = chunk.chunks_exact(LANES);
    for vs in &mut lanes {
        for i in 0..LANES {
            take(
                &mut max[i],
                &mut low[i],
                &mut nans[i],
                &mut count[i],
                vs[i],
                floor32,
            );
        }
    }
    for (i, &v) in lanes.remainder().iter().enumerate() {
        take(
            &mut max[i],
            &mut low[i],
            &mut nans[i],
            &mut count[i],
            v,
            floor32,
        );
    }
    let nan_count: usize = nans.iter().map(|&n| n as usize).sum();
    Summary {
        max: max.iter().fold(f32::NEG_INFINITY, |a, &b| a.max(b)),
        low: low.iter().fold(f32::INFINITY, |a, &b| a.min(b)),
        any_valid: nan_count < chunk.len(),
        any_missing: nan_count > 0,
        considered: count.iter().map(|&n| n as usize).sum(),
    }
}

/// What [`summary`] finds in a piece of the map.
#[derive(Clone, Copy)]
struct Summary {
    /// The highest value.
    max: f32,
    /// The lowest considered value (infinite if none).
    low: f32,
    any_valid: bool,
    any_missing: bool,
    /// How many pixels are considered.
    considered: usize,
}

/// Pixels per piece of the first pass over the map.
const SUMMARY_PIECE: usize = 1 << 16;

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

/// In the two-part sweep, marks the root cell of a component that met the seam (or a pixel
/// left to the replay): the part leaves every later pixel that joins it to the replay.
const FROZEN: u32 = 1 << 30;

/// The sweep of all pixels in key order on one thread.
const WHOLE: u8 = 0;
/// One part of the two-part sweep: its own pixels away from the seam, as long as their
/// components do not meet the seam.
const PART: u8 = 1;
/// The replay of the two-part sweep: the pixels the parts left, in key order.
const REPLAY: u8 = 2;

/// The buckets of keys shared by the sweep and the thread that sorts ahead of it (or by the
/// two parts of the two-part sweep, each sorting the buckets it reaches first). A bucket is
/// sorted by whichever thread claims it first; the sweeps read a bucket only once it is
/// sorted, and the sorting thread touches only the buckets it claimed, so no position is ever
/// used by both at once.
struct Pipeline<'a> {
    keys: radix::Out<u64>,
    starts: &'a [usize],
    state: Vec<AtomicU8>,
    bits: radix::KeyBits,
    /// For the two-part sweep: the first pixel of the second part and the mask of a key's
    /// index bits. Each bucket is then, once sorted, parted stably into the keys of the first
    /// part's pixels and those of the second's, and `split` keeps where the second begin.
    cut: Option<(usize, u64)>,
    split: Vec<AtomicUsize>,
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
            if let Some((cut, index_mask)) = self.cut {
                // A stable partition: the first part's keys stay in order at the front, the
                // second's follow, in order, from the scratch buffer.
                if scratch.len() < bucket.len() {
                    scratch.resize(bucket.len(), 0);
                }
                let (mut front, mut back) = (0, 0);
                for i in 0..bucket.len() {
                    let k = bucket[i];
                    if (((k >> 8) & index_mask) as usize) < cut {
                        bucket[front] = k;
                        front += 1;
                    } else {
                        scratch[back] = k;
                        back += 1;
                    }
                }
                bucket[front..].copy_from_slice(&scratch[..back]);
                self.split[b].store(a + front, Ordering::Relaxed);
            }
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

    /// Where the second part's keys of bucket `b` begin (once it is sorted).
    fn split(&self, b: usize) -> usize {
        self.split[b].load(Ordering::Relaxed)
    }
}

/// The nodes of a sweep and their areas (and, in the two-part sweep, the pixel where each was
/// made), written by index into buffers with room reserved. In the two-part sweep each part
/// and the replay take blocks of indices in turn from a shared counter and write only in
/// their own blocks; the replay reads the parts' nodes once they are done.
#[derive(Clone, Copy)]
struct Store {
    nodes: *mut Node,
    areas: *mut u32,
    born: *mut u32,
    /// The index of the next node made.
    next: u32,
    /// The end of the block being filled.
    end: u32,
    /// The room of the buffers.
    all: u32,
    /// The counter of blocks taken (two-part sweep), or null.
    taken: *const AtomicU32,
}

/// Node indices per block of the two-part sweep.
const BLOCK: u32 = 4096;

// SAFETY: each thread writes only its own blocks of indices and reads other blocks only after
// the threads that wrote them have finished (the parts before the replay).
unsafe impl Send for Store {}

impl Store {
    #[inline(always)]
    fn node(&self, n: u32) -> &Node {
        debug_assert!(n < self.all);
        // SAFETY: every index read was written before (a node's index is handed out only once
        // it is written) and lies inside the reserved room.
        unsafe { &*self.nodes.add(n as usize) }
    }

    #[inline(always)]
    #[allow(clippy::mut_from_ref)]
    fn node_mut(&self, n: u32) -> &mut Node {
        debug_assert!(n < self.all);
        // SAFETY: as in `node`; the sweeps write only nodes of their own blocks or, in the
        // replay, nodes the finished parts made, and hold no other reference to it meanwhile.
        unsafe { &mut *self.nodes.add(n as usize) }
    }

    #[inline(always)]
    fn area(&self, n: u32) -> u32 {
        debug_assert!(n < self.all);
        // SAFETY: as in `node`.
        unsafe { *self.areas.add(n as usize) }
    }

    #[inline(always)]
    fn set_area(&self, n: u32, a: u32) {
        debug_assert!(n < self.all);
        // SAFETY: as in `node_mut`.
        unsafe { *self.areas.add(n as usize) = a }
    }

    /// A new node made at pixel `p` with area `area`.
    #[inline(always)]
    fn push(&mut self, node: Node, area: u32, p: usize) {
        let n = self.next;
        // SAFETY: `n` is inside this store's block, which no other thread writes.
        unsafe {
            self.nodes.add(n as usize).write(node);
            self.areas.add(n as usize).write(area);
            if !self.born.is_null() {
                self.born.add(n as usize).write(p as u32);
            }
        }
        self.next = n + 1;
        if self.next == self.end {
            self.take_block();
        }
    }

    /// Takes the next free block of indices (the whole sweep has one block: all the room).
    #[cold]
    fn take_block(&mut self) {
        assert!(!self.taken.is_null(), "node room exhausted");
        // SAFETY: the counter outlives the sweep.
        let start = unsafe { &*self.taken }.fetch_add(BLOCK, Ordering::Relaxed);
        assert!(start + BLOCK <= self.all, "node room exhausted");
        (self.next, self.end) = (start, start + BLOCK);
    }

    /// The index the next node will take.
    #[inline(always)]
    fn next_index(&self) -> u32 {
        self.next
    }

    #[inline(always)]
    fn prefetch(&self, n: u32) {
        if n < self.all {
            prefetch_ptr(self.nodes.wrapping_add(n as usize));
            prefetch_ptr(self.areas.wrapping_add(n as usize));
        }
    }

    #[inline(always)]
    fn prefetch_area(&self, n: u32) {
        if n < self.all {
            prefetch_ptr(self.areas.wrapping_add(n as usize));
        }
    }
}

/// Asks the processor to fetch the cache line at `ptr` (which may lie outside any buffer: a
/// prefetch never faults).
#[inline(always)]
fn prefetch_ptr<T>(ptr: *const T) {
    #[cfg(target_arch = "x86_64")]
    {
        // SAFETY: a prefetch is only a hint; it never faults.
        #[allow(unused_unsafe)]
        unsafe {
            std::arch::x86_64::_mm_prefetch::<{ std::arch::x86_64::_MM_HINT_T0 }>(ptr as *const i8)
        };
    }
    #[cfg(not(target_arch = "x86_64"))]
    let _ = ptr;
}

/// The cells of the pixels, shared by the two parts of the two-part sweep, each of which
/// reads and writes only the cells of its own rows (a part's pixels away from the seam have
/// their neighbours in its rows, and the roots of its components are its pixels).
#[derive(Clone, Copy)]
struct Cells {
    ptr: *mut u32,
    len: usize,
}

impl Cells {
    #[inline(always)]
    fn get(self, i: usize) -> u32 {
        debug_assert!(i < self.len);
        // SAFETY: callers pass pixel indices below the map's size.
        unsafe { *self.ptr.add(i) }
    }

    #[inline(always)]
    fn set(self, i: usize, c: u32) {
        debug_assert!(i < self.len);
        // SAFETY: as in `get`.
        unsafe { *self.ptr.add(i) = c }
    }

    /// The union-find root of pixel `x` (visited), halving the path on the way.
    #[inline(always)]
    fn find(self, mut x: u32) -> u32 {
        loop {
            let px = self.get(x as usize);
            if px & ROOT != 0 {
                return x;
            }
            let ppx = self.get(px as usize);
            if ppx & ROOT != 0 {
                return px;
            }
            self.set(x as usize, ppx);
            x = ppx;
        }
    }

    #[inline(always)]
    fn prefetch(self, i: usize) {
        prefetch_ptr(self.ptr.wrapping_add(i));
    }
}

/// What every sweep step needs to know of the map and the thresholds.
struct Ctx<'a> {
    cells: Cells,
    keys: *mut u64,
    ncols: usize,
    npix: usize,
    delta: [isize; 8],
    groups: &'a [[u8; 5]; 256],
    index_mask: u64,
    bits: radix::KeyBits,
    min_area: usize,
    prominence: f64,
    /// The pixels of the seam's two rows, `[lo, hi)` (two-part sweep only).
    seam: (usize, usize),
    /// The first pixel of the second part (two-part sweep only).
    cut: usize,
    /// One bit per key: set for the keys the parts left to the replay (two-part sweep only).
    deferred: &'a [AtomicU64],
    /// One bit per key: set for those of them the replay visits in full.
    full: &'a [AtomicU64],
}

// SAFETY: the keys are read in sorted buckets and written at positions of the thread's own
// pixels only; see `Cells` for the cells.
unsafe impl Sync for Ctx<'_> {}

impl Ctx<'_> {
    #[inline(always)]
    fn key(&self, pos: usize) -> u64 {
        // SAFETY: callers read positions inside sorted buckets, which no thread sorts any more;
        // a position is written only by the thread that visits its pixel.
        unsafe { self.keys.add(pos).read() }
    }

    #[inline(always)]
    fn pixel(&self, key: u64) -> usize {
        ((key >> 8) & self.index_mask) as usize
    }

    #[inline(always)]
    fn in_seam(&self, p: usize) -> bool {
        p >= self.seam.0 && p < self.seam.1
    }

    /// The node index held by a root cell.
    #[inline(always)]
    fn node_of<const MODE: u8>(c: u32) -> u32 {
        if MODE == WHOLE {
            c & !ROOT
        } else {
            c & !(ROOT | FROZEN)
        }
    }

    /// The prefetches for the pixel whose key is at `pos`, `AHEAD` steps before its visit:
    /// the cells of its three rows.
    #[inline(always)]
    fn ahead1<const MODE: u8>(&self, pos: usize) {
        let q = self.pixel(self.key(pos));
        if MODE == PART && self.in_seam(q) {
            return;
        }
        let c = self.cells;
        c.prefetch(q.saturating_sub(self.ncols));
        c.prefetch(q);
        c.prefetch((q + self.ncols).min(self.npix - 1));
    }

    /// `AHEAD2` steps before the visit (large maps): the parent of each earlier neighbour's
    /// cell, or the area of its node at a root. The cells of its neighbours are in cache by
    /// now: fetch what its lookups will read next. Measured to help only on maps above 2^24
    /// pixels (wide keys; 8192^2: the sweep's median of 12 interleaved runs 1.56 s against
    /// 1.80 s); on smaller ones those reads mostly hit the cache and the extra work costs
    /// 10-20%.
    #[inline(always)]
    fn ahead2<const MODE: u8>(&self, pos: usize, store: &Store) {
        let k = self.key(pos);
        let q = self.pixel(k);
        if MODE == PART && self.in_seam(q) {
            return;
        }
        let group = &self.groups[k as u8 as usize];
        for &j in &group[1..=group[0] as usize] {
            let c = self
                .cells
                .get(q.wrapping_add(self.delta[j as usize] as usize));
            if c & ROOT == 0 {
                self.cells.prefetch(c as usize);
            } else {
                store.prefetch_area(Self::node_of::<MODE>(c));
            }
        }
    }

    /// `AHEAD3` steps before the visit (large maps): for a pixel whose earlier neighbours
    /// form two or more groups (a possible merge), the node and area of each group's root,
    /// whose cells are in cache by now (the merge test's reads were the sweep's costliest at
    /// 8192^2; the sweep's median of 15 interleaved runs there: 1.84 s against 2.05 s without
    /// this stage).
    #[inline(always)]
    fn ahead3<const MODE: u8>(&self, pos: usize, store: &Store) {
        let k = self.key(pos);
        let group = &self.groups[k as u8 as usize];
        if group[0] < 2 {
            return;
        }
        let q = self.pixel(k);
        if MODE == PART && self.in_seam(q) {
            return;
        }
        for &j in &group[1..=group[0] as usize] {
            let mut c = self
                .cells
                .get(q.wrapping_add(self.delta[j as usize] as usize));
            if c & ROOT == 0 {
                c = self.cells.get(c as usize);
            }
            if c & ROOT != 0 {
                store.prefetch(Self::node_of::<MODE>(c));
            }
        }
    }

    /// Visits the pixel whose key is at `pos` (in bucket `b`): joins it to the components of
    /// its earlier neighbours, merging and simplifying, and leaves beside its key the open
    /// node of its component. A part leaves the pixel to the replay instead (marking its
    /// position) if it lies on the seam or joins a component that met the seam or a pixel
    /// left to the replay; the components it would join then are frozen in turn.
    #[inline(always)]
    fn visit<const MODE: u8>(&self, pos: usize, b: usize, store: &mut Store) {
        let cells = self.cells;
        let key = self.key(pos);
        let (p, mask) = (self.pixel(key), key as u8);
        if MODE == PART && self.in_seam(p) {
            // The components of its earlier neighbours on this side stop here: each
            // neighbour is looked up (a group of them may reach across the cut).
            let first = p < self.cut;
            let mut m = mask;
            while m != 0 {
                let q = p.wrapping_add(self.delta[m.trailing_zeros() as usize] as usize);
                m &= m - 1;
                if (q < self.cut) == first {
                    let r = cells.find(q as u32) as usize;
                    let c = cells.get(r);
                    if c != UNVISITED {
                        cells.set(r, c | FROZEN);
                    }
                }
            }
            self.defer(pos, true);
            return;
        }
        if MODE == REPLAY && cells.get(p) != UNVISITED {
            // A pixel a part linked to the one component it joins.
            let r = cells.find(p as u32);
            let n = Self::node_of::<MODE>(cells.get(r as usize));
            store.set_area(n, store.area(n) + 1);
            // SAFETY: as below.
            unsafe { self.keys.add(pos).write(((n as u64) << 32) | p as u64) };
            return;
        }
        let v = from_order_key(!self.bits.value_half(b, key));
        // Distinct components among the neighbours visited before p (the bits of its mask),
        // one lookup per group of adjacent ones.
        let mut roots = [0u32; 4];
        let mut k = 0usize;
        let group = &self.groups[mask as usize];
        for &j in &group[1..=group[0] as usize] {
            let q = p.wrapping_add(self.delta[j as usize] as usize);
            // In a part, a neighbour left to the replay is still unvisited: it reads as a
            // frozen root of itself.
            let r = cells.find(q as u32);
            if !roots[..k].contains(&r) {
                roots[k] = r;
                k += 1;
            }
        }
        if MODE == PART
            && roots[..k]
                .iter()
                .any(|&r| cells.get(r as usize) & FROZEN != 0)
        {
            if k == 1 {
                // It joins one component, which met the seam (or is a pixel left to the
                // replay): linked now, as in the whole sweep; the replay only counts it in
                // the area and notes the open node beside its key, in key order.
                cells.set(p, roots[0]);
                self.defer(pos, false);
            } else {
                for &r in &roots[..k] {
                    let c = cells.get(r as usize);
                    if c != UNVISITED {
                        cells.set(r as usize, c | FROZEN);
                    }
                }
                self.defer(pos, true);
            }
            return;
        }
        let (link_p, node_p) = match k {
            0 => {
                let n = store.next_index();
                store.push(
                    Node {
                        alias: n,
                        peak: p as u32,
                        peak_val: v,
                        parent: NONE,
                        level: f32::NAN,
                        merge: f32::NAN,
                    },
                    1,
                    p,
                );
                (ROOT | n, n)
            }
            1 => {
                let r = roots[0];
                let n = Self::node_of::<MODE>(cells.get(r as usize));
                store.set_area(n, store.area(n) + 1);
                (r, n)
            }
            _ => {
                // Union by size: the largest component's root stays the root.
                let mut big = roots[0];
                let mut big_area = 0u32;
                for &r in &roots[..k] {
                    let a = store.area(Self::node_of::<MODE>(cells.get(r as usize)));
                    if a > big_area {
                        big_area = a;
                        big = r;
                    }
                }
                let mut open = [0u32; 4];
                for i in 0..k {
                    open[i] = Self::node_of::<MODE>(cells.get(roots[i] as usize));
                }
                let t = merge(store, &open[..k], v, p, self.min_area, self.prominence);
                for &r in &roots[..k] {
                    if r != big {
                        cells.set(r as usize, big);
                    }
                }
                cells.set(big as usize, ROOT | t);
                (big, t)
            }
        };
        cells.set(p, link_p);
        // SAFETY: the position of this thread's own pixel (see `key`).
        unsafe { self.keys.add(pos).write(((node_p as u64) << 32) | p as u64) };
    }

    /// Leaves the key at `pos` to the replay: a pixel to visit in full (`full`) or one
    /// linked already.
    #[inline(always)]
    fn defer(&self, pos: usize, full: bool) {
        let bit = 1 << (pos % 64);
        self.deferred[pos / 64].fetch_or(bit, Ordering::Relaxed);
        if full {
            self.full[pos / 64].fetch_or(bit, Ordering::Relaxed);
        }
    }

    /// The replay's prefetches for a pixel a part linked already (the entry of `list`
    /// without [`FULL`]): its cell, then its parent's cell, then its root's area.
    #[inline(always)]
    fn ahead_linked(&self, stage: u8, pos: usize, store: &Store) {
        let p = self.pixel(self.key(pos));
        match stage {
            1 => self.cells.prefetch(p),
            2 => self.cells.prefetch(self.cells.get(p) as usize),
            _ => {
                let c = self.cells.get(self.cells.get(p) as usize);
                if c & ROOT != 0 {
                    store.prefetch_area(Self::node_of::<REPLAY>(c));
                } else {
                    self.cells.prefetch(c as usize);
                }
            }
        }
    }

    /// Visits the keys at positions `range` of bucket `b` in order, with the prefetch stages
    /// reaching no further than `limit`.
    #[inline(always)]
    fn run<const PACKED: bool, const MODE: u8>(
        &self,
        range: std::ops::Range<usize>,
        limit: usize,
        b: usize,
        store: &mut Store,
    ) {
        for pos in range {
            if pos + AHEAD < limit {
                self.ahead1::<MODE>(pos + AHEAD);
            }
            if !PACKED && pos + AHEAD2 < limit {
                self.ahead2::<MODE>(pos + AHEAD2, store);
            }
            if !PACKED && pos + AHEAD3 < limit {
                self.ahead3::<MODE>(pos + AHEAD3, store);
            }
            self.visit::<MODE>(pos, b, store);
        }
    }

    /// Visits the keys at the positions `list` of bucket `b` in order (the replay); an entry
    /// with [`FULL`] is a pixel to visit in full, one without a pixel linked already.
    #[inline(always)]
    fn run_list<const PACKED: bool>(&self, list: &[u32], b: usize, store: &mut Store) {
        let ahead = |i: usize, stage: u8, store: &Store| {
            if let Some(&e) = list.get(i) {
                let pos = (e & !FULL) as usize;
                if e & FULL == 0 {
                    self.ahead_linked(stage, pos, store);
                } else {
                    match stage {
                        1 => self.ahead1::<REPLAY>(pos),
                        2 if !PACKED => self.ahead2::<REPLAY>(pos, store),
                        3 if !PACKED => self.ahead3::<REPLAY>(pos, store),
                        _ => {}
                    }
                }
            }
        };
        for (i, &e) in list.iter().enumerate() {
            ahead(i + AHEAD, 1, store);
            ahead(i + AHEAD2, 2, store);
            ahead(i + AHEAD3, 3, store);
            self.visit::<REPLAY>((e & !FULL) as usize, b, store);
        }
    }
}

/// Marks an entry of the replay's list as a pixel to visit in full.
const FULL: u32 = 1 << 31;

/// The nodes of a sweep, their areas and their order of making.
pub(super) struct Swept {
    nodes: Vec<Node>,
    areas: Vec<u32>,
    keys: Vec<u64>,
    /// For the two-part sweep, the pixel where each node was made (the nodes' order of making
    /// is that of these pixels' keys); empty after the sweep on one thread, whose nodes are
    /// numbered in the order they were made.
    born: Vec<u32>,
}

/// Visits the pixels in key order, merging components and simplifying on the fly. On one
/// thread the sweep is sequential while another thread (when the pool has more than one)
/// sorts the buckets of keys ahead of it. With two threads or more (and room in the cells'
/// bits for the node numbers) it runs in two parts at once and a replay; see
/// [`sweep_in_two`]. `cells` holds [`UNVISITED`] for every pixel on entry. Returns the
/// nodes, their areas and the keys, whose high half then holds the open node of each pixel's
/// component when the pixel was visited.
///
/// Each pixel has one 32-bit cell: [`UNVISITED`], its union-find parent, or `ROOT | open
/// node` at a component root. Small cells keep as much of the map as possible in cache, as
/// the order of the sweep is spatially random; the visiting node goes beside the key, which
/// is read in order anyway.
fn sweep<const PACKED: bool>(
    cells: &mut [u32],
    ncols: usize,
    seam_row: usize,
    buckets: radix::Buckets,
    params: &Params,
    progress: &dyn Fn(f64),
    core_free: &(dyn Fn() + Sync),
) -> Swept {
    let radix::Buckets {
        mut keys,
        starts,
        peaks,
        bits,
    } = buckets;
    let npix = cells.len();
    let nrows = npix / ncols.max(1);
    let nb = starts.len() - 1;
    // Every node starts a component at a pixel with no earlier neighbour (`peaks` of them) or
    // joins two or more components into one (fewer than `peaks`), so `2 peaks` is room
    // enough for a sweep (and for each part and the replay of the two-part sweep); about 99.5%
    // of the nodes of the synthetic maps are of the first kind, so a little more than `peaks`
    // of them are faulted in before the sweep.
    let room = 2 * peaks + 2;
    // The two-part sweep pays on maps whose cells are far larger than the processor's
    // caches, where each thread's sweep waits on main memory (8192^2: the sweep 0.94-0.97 s
    // against 1.15-1.28 s); on smaller ones, whose sweep is bound by its branches, the replay
    // costs more than the parts save (2048^2: 50-55 ms against 30-42 ms, 4096^2 even).
    let two = !PACKED
        && rayon::current_num_threads() > 1
        && nrows >= 2
        && nb >= 1
        && room + 4 * (BLOCK as usize) < FROZEN as usize;
    let index_mask = (1u64 << radix::index_bits(npix)) - 1;
    let pipe = Pipeline {
        keys: radix::Out(keys.as_mut_ptr()),
        starts: &starts,
        state: (0..nb).map(|_| AtomicU8::new(UNSORTED)).collect(),
        bits,
        cut: two.then_some((seam_row * ncols, index_mask)),
        split: (0..if two { nb } else { 0 })
            .map(|_| AtomicUsize::new(0))
            .collect(),
    };
    let groups = match params.connectivity {
        super::Connectivity::Eight => &GROUPS_EIGHT,
        super::Connectivity::Four => &GROUPS_FOUR,
    };
    let nkeys = starts[nb];
    let bitmap = || -> Vec<AtomicU64> {
        if two {
            (0..nkeys.div_ceil(64)).map(|_| AtomicU64::new(0)).collect()
        } else {
            Vec::new()
        }
    };
    let (deferred, full) = (bitmap(), bitmap());
    let ctx = Ctx {
        cells: Cells {
            ptr: cells.as_mut_ptr(),
            len: npix,
        },
        keys: keys.as_mut_ptr(),
        ncols,
        npix,
        delta: neighbour_steps(ncols),
        groups,
        index_mask,
        bits,
        min_area: params.min_area,
        prominence: params.prominence,
        seam: (
            seam_row.saturating_sub(1) * ncols,
            ((seam_row + 1) * ncols).min(npix),
        ),
        cut: seam_row * ncols,
        deferred: &deferred,
        full: &full,
    };
    let blank = Node {
        alias: 0,
        peak: 0,
        peak_val: 0.0,
        parent: NONE,
        level: 0.0,
        merge: 0.0,
    };
    let touch = peaks + peaks / 64 + 64;
    if !two {
        let mut nodes: Vec<Node> = pages::reserved(room, touch, blank);
        // The areas apart from the nodes: the sweep touches a component's area at every pixel
        // and the rest of its node only at merges, so the areas stay dense in cache.
        let mut areas: Vec<u32> = pages::reserved(room, touch, 0);
        let mut store = Store {
            nodes: nodes.as_mut_ptr(),
            areas: areas.as_mut_ptr(),
            born: std::ptr::null_mut(),
            next: 0,
            end: room as u32,
            all: room as u32,
            taken: std::ptr::null(),
        };
        rayon::in_place_scope(|scope| {
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
            let mut scratch = Vec::new();
            for b in 0..nb {
                pipe.wait(b, &mut scratch);
                // Keys may be read ahead as far as the buckets known to be sorted reach.
                let limit = if b + 1 < nb && pipe.is_sorted(b + 1) {
                    starts[b + 2]
                } else {
                    starts[b + 1]
                };
                let (s, e) = (starts[b], starts[b + 1]);
                let mut a = s;
                while a < e {
                    let z = (a - a % PROGRESS_STEP + PROGRESS_STEP).min(e);
                    if a % PROGRESS_STEP == 0 && a > 0 {
                        progress(super::SWEEP_STARTS + 0.6 * a as f64 / nkeys as f64);
                    }
                    ctx.run::<PACKED, WHOLE>(a..z, limit, b, &mut store);
                    a = z;
                }
            }
        });
        // SAFETY: the sweep wrote every node and area below `store.next`.
        unsafe {
            nodes.set_len(store.next as usize);
            areas.set_len(store.next as usize);
        }
        return Swept {
            nodes,
            areas,
            keys,
            born: Vec::new(),
        };
    }
    sweep_in_two::<PACKED>(&ctx, &pipe, keys, room, touch, blank, progress, core_free)
}

/// The sweep in two parts at once, then a replay, with exactly the results of the sweep on
/// one thread. The map is cut between two rows (where half the considered pixels lie on
/// each side); each part visits its own pixels in key order (each bucket, once sorted, parted
/// into each part's keys), joining and simplifying as the whole sweep would, until a pixel
/// lies on the seam (the two rows beside the cut) or meets a component that met the seam: a
/// component with no pixel on the seam is a component of the whole map, and so is its
/// history, so its pixels, area, peak and nodes are exactly the whole sweep's. A pixel that
/// meets a frozen component is left to the replay: one that joins just that component is
/// linked to it at once (the replay then counts it in the area and notes its open node),
/// any other is left unvisited and freezes the components it would join. The replay then
/// takes the pixels left, in key order, over the parts' cells and nodes, with the same rules.
/// On the 8192^2 bench map the parts leave 28% of the considered pixels to the replay, most
/// of them linked already.
///
/// The parts and the replay take blocks of node indices in turn; the pixel where each node
/// was made gives back the whole sweep's order of the nodes.
#[allow(clippy::too_many_arguments)]
fn sweep_in_two<const PACKED: bool>(
    ctx: &Ctx,
    pipe: &Pipeline,
    keys: Vec<u64>,
    room: usize,
    touch: usize,
    blank: Node,
    progress: &dyn Fn(f64),
    core_free: &(dyn Fn() + Sync),
) -> Swept {
    let starts = pipe.starts;
    let nb = starts.len() - 1;
    // Room for the nodes of the whole sweep and the unfilled ends of three blocks.
    let cap = room + 4 * BLOCK as usize;
    let mut nodes: Vec<Node> = pages::reserved(cap, touch, blank);
    let mut areas: Vec<u32> = pages::reserved(cap, touch, 0);
    let mut born: Vec<u32> = pages::reserved(cap, touch, 0);
    let taken = AtomicU32::new(0);
    let (pn, pa, pb) = (nodes.as_mut_ptr(), areas.as_mut_ptr(), born.as_mut_ptr());
    let new_store = || {
        let mut s = Store {
            nodes: pn,
            areas: pa,
            born: pb,
            next: 0,
            end: 0,
            all: cap as u32,
            taken: &taken,
        };
        s.take_block();
        s
    };
    let (mut first, mut second) = (new_store(), new_store());
    let part = |which: usize, store: &mut Store, progress: Option<&dyn Fn(f64)>| {
        let mut scratch = Vec::new();
        for b in 0..nb {
            pipe.wait(b, &mut scratch);
            if let Some(progress) = progress
                && b % 64 == 0
            {
                progress(super::SWEEP_STARTS + 0.4 * b as f64 / nb as f64);
            }
            let mid = pipe.split(b);
            let range = if which == 0 {
                starts[b]..mid
            } else {
                mid..starts[b + 1]
            };
            let limit = range.end;
            ctx.run::<PACKED, PART>(range, limit, b, store);
        }
    };
    let part = &part;
    rayon::in_place_scope(|scope| {
        let second = &mut second;
        scope.spawn(move |_| part(1, second, None));
        part(0, &mut first, Some(progress));
    });
    core_free();
    let mut replay = new_store();
    // The replay: bucket by bucket, the positions left by the two parts, merged back into
    // key order (their keys are untouched), then visited in that order.
    let mut list: Vec<u32> = Vec::new();
    let mut side: [Vec<u32>; 2] = [Vec::new(), Vec::new()];
    let bits_in = |s: usize, e: usize, out: &mut Vec<u32>| {
        out.clear();
        let mut pos = s;
        while pos < e {
            let (word, shift) = (pos / 64, pos % 64);
            let span = (64 - shift).min(e - pos);
            let keep = if span < 64 {
                (1u64 << span) - 1
            } else {
                u64::MAX
            };
            let mut w = (ctx.deferred[word].load(Ordering::Relaxed) >> shift) & keep;
            let f = (ctx.full[word].load(Ordering::Relaxed) >> shift) & keep;
            while w != 0 {
                let i = w.trailing_zeros();
                out.push((pos + i as usize) as u32 | if f >> i & 1 != 0 { FULL } else { 0 });
                w &= w - 1;
            }
            pos += span;
        }
    };
    for b in 0..nb {
        if b % 64 == 0 {
            progress(super::SWEEP_STARTS + 0.4 + 0.2 * b as f64 / nb as f64);
        }
        let mid = pipe.split(b);
        bits_in(starts[b], mid, &mut side[0]);
        bits_in(mid, starts[b + 1], &mut side[1]);
        list.clear();
        let (a, c) = (&side[0], &side[1]);
        let key = |e: u32| ctx.key((e & !FULL) as usize);
        let (mut i, mut j) = (0, 0);
        while i < a.len() && j < c.len() {
            if key(a[i]) < key(c[j]) {
                list.push(a[i]);
                i += 1;
            } else {
                list.push(c[j]);
                j += 1;
            }
        }
        list.extend_from_slice(&a[i..]);
        list.extend_from_slice(&c[j..]);
        ctx.run_list::<PACKED>(&list, b, &mut replay);
    }
    // The unfilled ends of the last blocks hold nodes that no pixel names, marked by a NaN
    // peak (no real peak is NaN), which are never taken for structures.
    let len = taken.load(Ordering::Relaxed) as usize;
    for s in [&first, &second, &replay] {
        for n in s.next..s.end {
            // SAFETY: inside the room, in a block taken and no longer written.
            unsafe {
                pn.add(n as usize).write(Node {
                    alias: n,
                    peak_val: f32::NAN,
                    ..blank
                });
                pa.add(n as usize).write(0);
                pb.add(n as usize).write(0);
            }
        }
    }
    // SAFETY: every index below `len` lies in a block taken, written by its node or above.
    unsafe {
        nodes.set_len(len);
        areas.set_len(len);
        born.set_len(len);
    }
    Swept {
        nodes,
        areas,
        keys,
        born,
    }
}

/// Joins the components whose open nodes are `open` at pixel `p` of value `v`; returns the
/// open node of the joined component (with its area counting the new pixel). Areas of the
/// old open nodes are left untouched for the caller's union by size.
fn merge(
    store: &mut Store,
    open: &[u32],
    v: f32,
    p: usize,
    min_area: usize,
    prominence: f64,
) -> u32 {
    let mut sig = [false; 8];
    let k = open.len();
    let mut nsig = 0;
    let mut total: u32 = 1;
    let mut best = 0usize; // index of the best peak among all
    let mut best_sig: Option<usize> = None; // best peak among significant
    let mut best_same: Option<usize> = None; // best peak among same-level branches
    for i in 0..k {
        let n = open[i];
        let nd = *store.node(n);
        let area = store.area(n);
        total += area;
        let pv = nd.peak_val;
        sig[i] = area as usize >= min_area && pv > v && pv as f64 - v as f64 >= prominence;
        let better = |j: usize, store: &Store| {
            let o = store.node(open[j]);
            before(pv, nd.peak, o.peak_val, o.peak)
        };
        if i > 0 && better(best, store) {
            best = i;
        }
        if sig[i] {
            nsig += 1;
            if best_sig.is_none_or(|j| better(j, store)) {
                best_sig = Some(i);
            }
            if nd.level == v && best_same.is_none_or(|j| better(j, store)) {
                best_same = Some(i);
            }
        }
    }
    let top = *store.node(open[best]);
    let t = if nsig >= 2 {
        let t = match best_same {
            Some(i) => open[i],
            None => {
                let t = store.next_index();
                store.push(
                    Node {
                        alias: t,
                        peak: top.peak,
                        peak_val: top.peak_val,
                        parent: NONE,
                        level: v,
                        merge: f32::NAN,
                    },
                    0,
                    p,
                );
                t
            }
        };
        for i in 0..k {
            let n = open[i];
            if n == t {
                continue;
            }
            let nd = store.node_mut(n);
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
        for &n in open {
            if n != t {
                store.node_mut(n).alias = t;
            }
        }
        t
    };
    store.set_area(t, total);
    let nd = store.node_mut(t);
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
                    chunk.iter().filter(|&&v| v >= floor32).count(),
                );
                let got = summary(&chunk, floor32);
                // Which zero a signed zero yields depends on the order of comparisons; the
                // order keys count both as +0.0 (`order_key`), so they are compared as one.
                let bits = |v: f32| (v + 0.0).to_bits();
                assert_eq!(
                    (
                        bits(got.max),
                        bits(got.low),
                        got.any_valid,
                        got.any_missing,
                        got.considered
                    ),
                    (bits(want.0), bits(want.1), want.2, want.3, want.4),
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

//! The hierarchy engine: finds the peaks of a map and how they nest, as a simplified
//! component tree of its upper level sets.
//!
//! Owns [`build`] (map -> [`Hierarchy`]), the per-structure moment sums ([`Moments`]) and the
//! optional watershed growth of leaf footprints ([`grow_leaves`]) with the grown leaves' own
//! sums ([`grown_leaves_hierarchy`]). It knows nothing of files,
//! units or world coordinates.
//!
//! # Vocabulary
//! A *structure* is any node of the hierarchy; a *leaf* has no children (a core candidate); a
//! *branch* has two or more children; a *root* has no parent.
//!
//! # Method
//! The component tree (max-tree) of the upper level sets `{map >= t}` is built by union-find
//! over flat arrays, visiting pixels from the highest down (Najman & Couprie 2006, IEEE TIP 15,
//! 3531; Berger et al. 2007, ICIP; review by Carlinet & Geraud 2014, IEEE TIP 23, 3885). The
//! pixel order comes from a radix sort of 64-bit keys (order-preserving 32-bit image of the
//! value, then the linear index): a parallel pass into buckets by the leading bits of the
//! value, then each bucket sorted in cache, on a second thread ahead of the sweep. The tree is
//! simplified *while* components merge, so the full max-tree is never stored.
//!
//! On maps above 2^24 pixels, whose sweep waits on main memory, a pool of two threads or more
//! sweeps the map in two parts at once and then replays what they left, with the sequential
//! sweep's results to the bit. The idea of cutting the map into parts swept on their own and
//! joined along the cut is that of shared-memory parallel max-trees (Wilkinson et al. 2008,
//! IEEE TPAMI 30, 1800, reference from memory; Moschini, Meijster & Wilkinson 2018, IEEE
//! TPAMI 40, 513), who build each part's full
//! tree and merge the trees; since this tree is simplified as it is built, here each part
//! stops following a component once it reaches the cut (a component with no pixel on the cut
//! is a component of the whole map, with the same history), and a sequential replay in the
//! pixel order finishes the components that cross it (see `engine::sweep_in_two`).
//!
//! # Exact rules
//! * **Pixels considered.** A pixel takes part iff its value is not NaN and `value >= floor`.
//!   Other pixels belong to no structure (label -1). `-0.0` counts as `+0.0`.
//! * **Order and ties.** Pixels are visited in a strict total order: higher value first; among
//!   equal values, lower linear index (`row * ncols + col`) first. A pixel `q` is "above" `p`
//!   iff it comes earlier in this order. Every choice below that needs a winner uses it, so
//!   results never depend on the thread count or scheduling.
//! * **Peak.** The peak of a set of pixels is its first pixel in that order: the highest
//!   value, and among equal highest values the lowest linear index. On a flat top (plateau)
//!   the peak is the plateau pixel with the lowest linear index.
//! * **Merge test.** When pixel `p` of value `v` joins two or more components, each component
//!   `C` (the pixels above `p` connected to it without `p`) is *significant* iff
//!   `peak(C) - v >= prominence` **and** `peak(C) > v` **and** `area(C) >= min_area`, where
//!   `area(C)` counts the pixels of `C` (all strictly above `p` in the order). The strict
//!   `peak(C) > v` keeps a plateau one structure even with `prominence = 0`: pieces of one
//!   flat zone that meet at their own level are never separate peaks.
//!   - two or more significant components: each one's structure is closed with
//!     `merge_level = v` and becomes a child of a branch that starts at `p`; the weak
//!     components' pixels become the branch's own pixels;
//!   - exactly one significant component: its structure simply continues and the weak
//!     components' pixels join it (they are *absorbed* into the neighbour they meet);
//!   - none: the pieces join into one component that keeps the highest peak and is tested
//!     again at its next merge.
//! * **Plateau branches.** If, among the significant components at level `v`, some already
//!   carry a branch that started at exactly the value `v` (several merges on one flat level),
//!   the other significant structures join that branch (the one whose peak comes first) as
//!   further children, and other such same-level branches are fused into it. Hence all
//!   children of a branch have `merge_level` equal to the value where the branch starts.
//! * **Collapse.** A structure never has exactly one child: a component whose only partners
//!   at a merge are weak continues as the *same* structure (same id, same peak) below that
//!   level. So "a node with one surviving child" is the child itself, continued down to the
//!   next level where it meets another significant structure or to the end of its component.
//! * **Roots.** When all pixels have been visited, each remaining component is a root iff
//!   `peak - floor >= prominence` and `area >= min_area` (it meets nothing, so the floor is
//!   its reference level; no strict test, so with `prominence = 0` and `min_area = 1` the
//!   roots are exactly the connected components of `{map >= floor}`). A component failing
//!   this test is dropped: its pixels get label -1. A component holding any accepted
//!   structure always passes. A root's `merge_level` is `None`.
//! * **Pixels of a structure.** A leaf's pixels are its component down to its merge level
//!   (its own pixels plus those of the weak peaks it absorbed). A branch's pixels are its
//!   descendants' pixels plus its own: the pixels that joined below the level where it starts
//!   and those of weak pieces absorbed into it (which may lie above that level, for instance
//!   a narrow spike failing `min_area`). `labels` gives, for each pixel, the smallest
//!   structure containing it.
//! * **Ids.** Structures are numbered 0.. in the order of their peaks (the pixel order above);
//!   a branch shares its peak with one of its descendants and comes before it (ancestors
//!   first). So id 0 is the root holding the highest pixel.
//!
//! # Memory
//! Besides the map: 8 bytes per considered pixel for the keys (each bucket is sorted in place
//! through a scratch buffer of one bucket per thread), one 4-byte cell per pixel during the
//! sweep (the union-find link, or the open node at a component root; small so that as much of
//! the map as possible stays in cache for the spatially random sweep), plus 28 bytes per
//! candidate peak (regional maximum) met (room for twice as many is reserved, as address
//! space only; about as many as there are pixels without an earlier neighbour are touched;
//! the two-part sweep adds 4 bytes per candidate for the pixel where it was made and two bits
//! per considered pixel for what the parts leave to the replay). The sweep writes each
//! pixel's visiting node into the
//! high half of its key, which it has just read; the cells then become the 4-byte label array
//! in place and the labels are scattered from the keys. So the peak is about map + 12 bytes
//! per pixel, during the sweep. Moment sums are gathered after the sweep from the label map, for the accepted structures only (absorbed
//! candidates never carry sums), in row blocks fixed by the map size so that sums do not
//! depend on the thread count; each block holds sums only for the structures it meets.
//! Each structure's sums are taken about its peak pixel (a child's are moved to its
//! parent's peak by the parallel-axis relations), so that the second moments of a small
//! structure far from the map's origin keep their precision on maps of any size.
//!
//! # Speed
//! The sort is parallel and the sweep sequential, bound by memory latency; the two overlap,
//! and the sweep touches as little scattered memory per pixel as possible:
//! * the keys are first scattered in parallel into buckets by the leading bits in which the
//!   considered values differ (a few thousand keys per bucket on average); the sweep then
//!   takes the buckets in order while a second thread sorts the ones after it (a radix sort
//!   of each bucket on its remaining bits, in cache). Whichever thread claims a bucket first
//!   sorts it, and the sweep reads a bucket only once it is sorted, so the order, and every
//!   result, is that of a full sort before the sweep;
//! * the earlier-neighbour bytes are computed in parallel in raster order before the sweep,
//!   so it never tests unvisited cells nor needs the pixel's row and column: each byte rides
//!   in the low bits of its pixel's key (`index << 8 | byte`), read in order, and the bytes
//!   are made row by row while the keys are scattered into their buckets (sixteen pixels at
//!   a time with SSE2 on x86-64). Maps of up to 2^24 pixels keep the whole 32-bit value
//!   above; larger ones, whose indices need more bits, only the value bits below the bucket
//!   digit (at most 20 of them, the bucket giving the rest), so no map needs a byte array;
//! * two visited pixels that touch are always in one component already (the later was joined
//!   to the earlier when it was visited), so the sweep looks up the union-find root of only
//!   one neighbour per group of earlier neighbours that touch each other, from a table of the
//!   256 neighbour bytes; with 8-connectivity most pixels need one lookup instead of about
//!   four (the same observation drives the decision trees of two-pass connected-component
//!   labelling, Wu, Otoo & Suzuki 2009, Pattern Analysis and Applications 12, 117; cited
//!   from memory);
//! * the cells of the pixels a few steps ahead are prefetched;
//! * the cells are filled in parallel before the sweep (`pages.rs`), so their pages are
//!   faulted in by every thread rather than one by one by the sweep, and so is the room for
//!   the nodes the sweep will make (one per pixel without an earlier neighbour, counted while
//!   the keys are scattered, and a few more): the sweep's thread takes almost no page faults
//!   (none at 8192^2 on the bench's synthetic map, 30 at 1024^2, against 21,632 and 231).
//!   (Transparent huge pages for the cells were tried and made no measurable difference
//!   here.)
//!
//! `benches/hierarchy.rs` times the phases and prints a digest of every result, so a change
//! of the engine can be shown to change no output.

/// A small seeded generator for this module's unit tests (64-bit linear congruential steps
/// with Knuth's MMIX constants), so every test map is the same on every run. Returns the
/// whole state; callers take the high bits.
#[cfg(test)]
pub(crate) fn test_lcg(seed: u64) -> impl FnMut() -> u64 {
    let mut s = seed;
    move || {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        s
    }
}

mod engine;
mod grow;
mod moments;
mod pages;
mod radix;

use ndarray::Array2;
use petgraph::graph::DiGraph;
use std::fmt;

pub use engine::{build, build_with_hooks, build_with_progress};

/// The progress fraction [`build_with_progress`] reports when its parallel passes are done and
/// its sequential sweep begins (from then until 0.9 one core sweeps and one sorts the buckets
/// of keys ahead of it, which takes it a fraction of the time; the other cores are free).
pub const SWEEP_STARTS: f64 = 0.3;
pub use grow::{GrownLeaves, grow_leaves, grown_leaves_hierarchy};
pub use moments::Moments;

/// Which pixels touch: 4 (edges) or 8 (edges and corners).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Connectivity {
    /// Pixels sharing an edge.
    Four,
    /// Pixels sharing an edge or a corner.
    Eight,
}

impl Connectivity {
    /// The (row, column) offsets of the neighbours.
    pub fn offsets(self) -> &'static [(isize, isize)] {
        const FOUR: [(isize, isize); 4] = [(-1, 0), (0, -1), (0, 1), (1, 0)];
        const EIGHT: [(isize, isize); 8] = [
            (-1, -1),
            (-1, 0),
            (-1, 1),
            (0, -1),
            (0, 1),
            (1, -1),
            (1, 0),
            (1, 1),
        ];
        match self {
            Connectivity::Four => &FOUR,
            Connectivity::Eight => &EIGHT,
        }
    }
}

/// Thresholds of the hierarchy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Params {
    /// Lowest level considered: pixels below it belong to nothing.
    pub floor: f64,
    /// How far a peak must rise above the level where it meets a neighbouring structure.
    pub prominence: f64,
    /// Least number of pixels of a leaf (its pixels above its merge level).
    pub min_area: usize,
    /// Pixel adjacency.
    pub connectivity: Connectivity,
}

/// One node of the hierarchy.
#[derive(Debug, Clone, PartialEq)]
pub struct Structure {
    /// Index in [`Hierarchy::structures`] (and graph node index).
    pub id: u32,
    /// The smallest structure strictly containing this one.
    pub parent: Option<u32>,
    /// Children, in increasing id.
    pub children: Vec<u32>,
    /// Highest value.
    pub peak_value: f64,
    /// Column of the peak.
    pub peak_x: usize,
    /// Row of the peak.
    pub peak_y: usize,
    /// Value of the pixel where this structure joins its parent (the level where the parent
    /// branch starts); `None` for roots, whose reference level is the floor.
    pub merge_level: Option<f64>,
    /// Lowest value among its pixels (descendants included).
    pub min_value: f64,
    /// Number of pixels, descendants included.
    pub npix: u64,
    /// Number of pixels whose smallest structure is this one.
    pub npix_own: u64,
    /// Moment sums over all its pixels, descendants included.
    pub sums: Moments,
    /// Number of ancestors (0 for roots).
    pub depth: u32,
    /// Whether one of its pixels lies on the map border.
    pub touches_edge: bool,
    /// Whether one of its pixels has a missing (NaN) neighbour.
    pub touches_missing: bool,
}

impl Structure {
    /// Whether it has no children.
    pub fn is_leaf(&self) -> bool {
        self.children.is_empty()
    }
}

/// The simplified component tree of a map.
#[derive(Debug, Clone)]
pub struct Hierarchy {
    /// All structures, indexed by id.
    pub structures: Vec<Structure>,
    /// Smallest structure containing each pixel, -1 for none; same shape as the map.
    pub labels: Array2<i32>,
    /// Parent -> child edges; node index `i` holds structure id `i`.
    pub graph: DiGraph<u32, ()>,
    /// The thresholds used.
    pub params: Params,
}

impl Hierarchy {
    /// Ids of the leaves, increasing.
    pub fn leaves(&self) -> Vec<u32> {
        self.structures
            .iter()
            .filter(|s| s.is_leaf())
            .map(|s| s.id)
            .collect()
    }

    /// Ids of the roots, increasing.
    pub fn roots(&self) -> Vec<u32> {
        self.structures
            .iter()
            .filter(|s| s.parent.is_none())
            .map(|s| s.id)
            .collect()
    }
}

/// Why a hierarchy cannot be built.
#[derive(Debug, Clone, PartialEq)]
pub enum HierarchyError {
    /// The prominence is negative or not a number.
    BadProminence(f64),
    /// The floor is not a number.
    BadFloor,
    /// `min_area` exceeds the number of pixels.
    MinAreaTooLarge { min_area: usize, npix: usize },
    /// The floor lies above every pixel.
    FloorAboveMaximum { floor: f64, max: f64 },
    /// The map has no pixel that is not missing.
    NoValidPixels,
    /// The map has more pixels than the engine's 31-bit indices can hold.
    MapTooLarge(usize),
}

impl fmt::Display for HierarchyError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            HierarchyError::BadProminence(p) => {
                write!(f, "the prominence must be a non-negative number, not {p}")
            }
            HierarchyError::BadFloor => write!(f, "the floor must be a number, not NaN"),
            HierarchyError::MinAreaTooLarge { min_area, npix } => write!(
                f,
                "the minimum area of {min_area} pixels is larger than the map's {npix} pixels"
            ),
            HierarchyError::FloorAboveMaximum { floor, max } => write!(
                f,
                "the floor {floor} lies above the map's highest value {max}, so nothing is left"
            ),
            HierarchyError::NoValidPixels => {
                write!(f, "the map has no pixel with a value (all are missing)")
            }
            HierarchyError::MapTooLarge(n) => write!(
                f,
                "the map has {n} pixels, more than the 2^31 - 1 the hierarchy engine supports"
            ),
        }
    }
}

impl std::error::Error for HierarchyError {}

#[cfg(test)]
mod tests;

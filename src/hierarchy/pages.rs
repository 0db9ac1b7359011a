//! Large working buffers of the engine, filled in parallel so that their pages are faulted in
//! by all threads rather than one at a time by the sequential sweep.

use rayon::prelude::*;

/// An empty vector with room for `cap` items, of which the first `touch` (at most `cap`) are
/// written once with `value`, in parallel, so that their pages are faulted in now by all
/// threads rather than one at a time by the sequential sweep as it pushes items.
pub(super) fn reserved<T: Copy + Send + Sync>(cap: usize, touch: usize, value: T) -> Vec<T> {
    let mut v = Vec::with_capacity(cap);
    v.spare_capacity_mut()[..touch.min(cap)]
        .par_chunks_mut(1 << 16)
        .for_each(|c| c.fill(std::mem::MaybeUninit::new(value)));
    v
}

/// A vector of `n` copies of `value`, filled in parallel (fixed pieces).
pub(super) fn filled<T: Copy + Send + Sync>(n: usize, value: T) -> Vec<T> {
    let mut v = reserved(n, n, value);
    // SAFETY: all `n` items were just written.
    unsafe { v.set_len(n) };
    v
}

//! Large working buffers of the engine, backed by transparent huge pages where the system
//! offers them on request (Linux `madvise(MADV_HUGEPAGE)`; elsewhere, or when refused, plain
//! pages). The sweep and the label scatter touch their buffers in a spatially random order,
//! so 2 MiB pages save most of the address-translation misses, and a fresh buffer is faulted
//! in with a few hundred faults instead of a few hundred thousand. Only a hint: results never
//! depend on it.

use rayon::prelude::*;

/// Size of a huge page on x86_64 and aarch64 Linux.
const HUGE: usize = 2 << 20;

/// An empty vector with room for `n` items, its memory advised to use huge pages before
/// anything touches it.
pub(super) fn with_capacity<T>(n: usize) -> Vec<T> {
    let mut v = Vec::with_capacity(n);
    advise(v.as_mut_ptr() as *mut u8, n * std::mem::size_of::<T>());
    v
}

/// A vector of `n` copies of `value`, filled in parallel (fixed pieces), huge pages advised.
pub(super) fn filled<T: Copy + Send + Sync>(n: usize, value: T) -> Vec<T> {
    let mut v = with_capacity(n);
    v.spare_capacity_mut()
        .par_chunks_mut(1 << 16)
        .for_each(|c| c.fill(std::mem::MaybeUninit::new(value)));
    // SAFETY: all `n` items were just written.
    unsafe { v.set_len(n) };
    v
}

#[cfg(target_os = "linux")]
fn advise(ptr: *mut u8, len: usize) {
    if len < 2 * HUGE {
        return;
    }
    let start = (ptr as usize).next_multiple_of(HUGE);
    let end = (ptr as usize + len) & !(HUGE - 1);
    if end > start {
        // SAFETY: the range lies inside an allocation this process owns; MADV_HUGEPAGE only
        // changes how the kernel backs it and never its contents. A refusal is harmless.
        unsafe {
            libc::madvise(start as *mut libc::c_void, end - start, libc::MADV_HUGEPAGE);
        }
    }
}

#[cfg(not(target_os = "linux"))]
fn advise(_ptr: *mut u8, _len: usize) {}

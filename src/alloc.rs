//! The memory allocator of the `cairn` binary (and of the benchmarks, which time what it does):
//! the system allocator for small blocks; on Linux, each large block in an anonymous mapping of
//! its own, starting on a 2 MiB boundary and advised to the kernel as wanting huge pages.
//!
//! Why: every fresh page of memory costs a page fault when first written, and a
//! segmentation's working arrays (some 14 bytes per pixel, each written once or twice) are
//! mostly fresh memory. On the 2-core development machine (a virtual machine, Linux 6.18,
//! transparent huge pages on `madvise`), first writes to fresh memory took about
//! 2.3 microseconds per 4 KiB page in 4 KiB pages and about 0.5 microseconds per 4 KiB in 2 MiB
//! pages; the sweep's scattered reads of its union-find arrays also miss the
//! address-translation cache less in 2 MiB pages. A segmentation of the 8192 x 8192 bench map
//! took 248,000 page faults with the system allocator alone and 34,000 with this one, and
//! interleaved runs took 6-10% less time (median and best of six; see BENCHMARKS.md); on the
//! 1024 x 1024 map the difference was within the machine's noise.
//!
//! How (Linux): a block of [`HUGE`] bytes or more (with an alignment of at most [`HUGE`]) gets
//! a private anonymous mapping of its own, starting on a 2 MiB boundary; its whole 2 MiB
//! stretches (not a partial last one, where a huge page would hold memory the block never
//! uses) are passed to `madvise(MADV_HUGEPAGE)` before anything is written to them. The kernel
//! backs them with huge pages when it has them at hand (where transparent huge pages are set
//! to `madvise`, the common default, or `always`) and with ordinary pages otherwise; the advice
//! changes no byte of any result, only how memory is mapped. A freed block is unmapped at once.
//! Smaller blocks, and every block on other systems, go to the system allocator unchanged.
//!
//! The kernel's documentation of the advice: `madvise(2)` and
//! `Documentation/admin-guide/mm/transhuge.rst` in the Linux sources. The system allocator is
//! kept rather than replaced (jemalloc and mimalloc can give the same advice but change every
//! other allocation policy as well and add a C build). The library itself never sets a global
//! allocator, so programs using it keep their own.

use std::alloc::{GlobalAlloc, Layout, System};

/// Blocks at least this large (one huge page) get a mapping of their own.
pub const HUGE: usize = 2 << 20;

/// The allocator described in the module's documentation. A program sets it as its global
/// allocator with
/// `#[global_allocator] static ALLOC: cairn::alloc::Advised = cairn::alloc::Advised;`.
pub struct Advised;

/// Whether blocks of this size and alignment are mapped by [`map`]. A block's layout is given
/// again unchanged to `dealloc` and `realloc`, so this answers the same on every call for it.
#[cfg(target_os = "linux")]
fn ours(size: usize, align: usize) -> bool {
    size >= HUGE && align <= HUGE
}

#[cfg(not(target_os = "linux"))]
fn ours(_size: usize, _align: usize) -> bool {
    false
}

// SAFETY: blocks the system allocator makes are passed back to it unchanged. The others are
// private anonymous mappings of at least the size asked (whole pages), aligned to 2 MiB and so
// to any alignment up to it, zeroed by the kernel, used by nothing else, and unmapped (whole,
// or in whole pages past a shrunk block's end) only when the block is freed or shrunk.
unsafe impl GlobalAlloc for Advised {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if ours(layout.size(), layout.align()) {
            map(layout.size())
        } else {
            // SAFETY: the caller's contract is passed on as is.
            unsafe { System.alloc(layout) }
        }
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        if ours(layout.size(), layout.align()) {
            // A fresh anonymous mapping reads as zeros.
            map(layout.size())
        } else {
            // SAFETY: as for `alloc`.
            unsafe { System.alloc_zeroed(layout) }
        }
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        if ours(layout.size(), layout.align()) {
            unmap(ptr as usize, pages(layout.size()));
        } else {
            // SAFETY: as for `alloc`.
            unsafe { System.dealloc(ptr, layout) }
        }
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let (was, will) = (
            ours(layout.size(), layout.align()),
            ours(new_size, layout.align()),
        );
        if !was && !will {
            // SAFETY: as for `alloc`.
            return unsafe { System.realloc(ptr, layout, new_size) };
        }
        if was && will && new_size <= layout.size() {
            // Shrunk in place: the whole pages past the new end are given back.
            let (old, new) = (pages(layout.size()), pages(new_size));
            if new < old {
                unmap(ptr as usize + new, old - new);
            }
            return ptr;
        }
        // SAFETY: `new_size` with the old alignment is a valid layout (the caller's contract).
        let new = unsafe { Layout::from_size_align_unchecked(new_size, layout.align()) };
        // SAFETY: `new` has a non-zero size, as `layout` has.
        let p = unsafe { self.alloc(new) };
        if !p.is_null() {
            // SAFETY: both blocks are live, distinct and at least this long; the old one is
            // freed with its own layout.
            unsafe {
                std::ptr::copy_nonoverlapping(ptr, p, layout.size().min(new_size));
                self.dealloc(ptr, layout);
            }
        }
        p
    }
}

/// `size` rounded up to whole pages of the system.
fn pages(size: usize) -> usize {
    size.next_multiple_of(page_size())
}

/// The system's page size, asked once.
#[cfg(target_os = "linux")]
fn page_size() -> usize {
    use std::sync::atomic::{AtomicUsize, Ordering};
    static PAGE: AtomicUsize = AtomicUsize::new(0);
    match PAGE.load(Ordering::Relaxed) {
        0 => {
            // SAFETY: sysconf has no preconditions.
            let p = unsafe { libc::sysconf(libc::_SC_PAGESIZE) };
            let p = if p > 0 { p as usize } else { 4096 };
            PAGE.store(p, Ordering::Relaxed);
            p
        }
        p => p,
    }
}

#[cfg(not(target_os = "linux"))]
fn page_size() -> usize {
    4096
}

/// A fresh mapping of `size` bytes (whole pages) starting on a 2 MiB boundary, its whole 2 MiB
/// stretches advised to use huge pages; null if the system refuses it.
#[cfg(target_os = "linux")]
fn map(size: usize) -> *mut u8 {
    // Room for the block wherever the kernel puts the mapping; the rest is given back.
    let Some(total) = size
        .checked_next_multiple_of(page_size())
        .and_then(|l| l.checked_add(HUGE))
    else {
        return std::ptr::null_mut();
    };
    let len = pages(size);
    // SAFETY: an anonymous private mapping at an address of the kernel's choosing.
    let raw = unsafe {
        libc::mmap(
            std::ptr::null_mut(),
            total,
            libc::PROT_READ | libc::PROT_WRITE,
            libc::MAP_PRIVATE | libc::MAP_ANONYMOUS,
            -1,
            0,
        )
    };
    if raw == libc::MAP_FAILED {
        return std::ptr::null_mut();
    }
    let base = raw as usize;
    let start = base.next_multiple_of(HUGE);
    unmap(base, start - base);
    unmap(start + len, base + total - (start + len));
    // SAFETY: the stretch lies inside the mapping just made, which nothing has written yet;
    // the advice does not change its contents. A refusal (a kernel without transparent huge
    // pages) leaves ordinary pages, so its result is not needed.
    unsafe {
        libc::madvise(
            start as *mut libc::c_void,
            size / HUGE * HUGE,
            libc::MADV_HUGEPAGE,
        );
    }
    start as *mut u8
}

#[cfg(not(target_os = "linux"))]
fn map(_size: usize) -> *mut u8 {
    std::ptr::null_mut()
}

/// Unmaps `len` bytes (whole pages) from `start`, part of a mapping made by [`map`] that
/// nothing uses any more; nothing if `len` is 0.
#[cfg(target_os = "linux")]
fn unmap(start: usize, len: usize) {
    if len > 0 {
        // SAFETY: the caller's contract: whole pages of our own mapping, no longer used.
        unsafe {
            libc::munmap(start as *mut libc::c_void, len);
        }
    }
}

#[cfg(not(target_os = "linux"))]
fn unmap(_start: usize, _len: usize) {}

#[cfg(test)]
mod tests {
    use super::*;

    /// Fills `n` bytes from `p` with a pattern of `seed`.
    fn fill(p: *mut u8, n: usize, seed: u8) {
        // SAFETY: the tests pass live blocks of at least `n` bytes.
        let s = unsafe { std::slice::from_raw_parts_mut(p, n) };
        s.iter_mut()
            .enumerate()
            .for_each(|(i, b)| *b = (i as u8).wrapping_mul(31).wrapping_add(seed));
    }

    /// Whether the first `n` bytes from `p` hold the pattern of `seed`.
    fn holds(p: *const u8, n: usize, seed: u8) -> bool {
        // SAFETY: as for `fill`.
        let s = unsafe { std::slice::from_raw_parts(p, n) };
        s.iter()
            .enumerate()
            .all(|(i, &b)| b == (i as u8).wrapping_mul(31).wrapping_add(seed))
    }

    fn layout(size: usize, align: usize) -> Layout {
        Layout::from_size_align(size, align).unwrap()
    }

    #[test]
    fn blocks_of_every_size_hold_what_is_written_through_growth_and_shrinking() {
        let a = Advised;
        // Small to large, larger, shrunk while large, shrunk to small: every step keeps the
        // bytes both blocks have, whichever allocator made each.
        let sizes = [
            1000,
            HUGE - 1,
            HUGE,
            HUGE + 5,
            3 * HUGE + 4097,
            HUGE + 1,
            5000,
        ];
        let mut l = layout(sizes[0], 8);
        // SAFETY: a valid non-zero layout; every block below is used within its size and
        // freed once with its own layout.
        unsafe {
            let mut p = a.alloc(l);
            assert!(!p.is_null());
            fill(p, l.size(), 7);
            for &s in &sizes[1..] {
                let q = a.realloc(p, l, s);
                assert!(!q.is_null(), "realloc to {s} bytes failed");
                assert!(
                    holds(q, l.size().min(s), 7),
                    "bytes lost from {} to {s}",
                    l.size()
                );
                l = layout(s, 8);
                fill(q, s, 7);
                p = q;
            }
            a.dealloc(p, l);
        }
    }

    #[test]
    fn large_blocks_are_aligned_zeroed_and_usable_to_their_last_byte() {
        let a = Advised;
        for size in [HUGE, HUGE + 3, 2 * HUGE, 5 * HUGE - 4096 + 17] {
            let l = layout(size, 64);
            // SAFETY: as in the test above.
            unsafe {
                let p = a.alloc_zeroed(l);
                assert!(!p.is_null());
                assert_eq!(p as usize % 64, 0);
                #[cfg(target_os = "linux")]
                assert_eq!(p as usize % HUGE, 0, "a large block starts on 2 MiB");
                assert!(std::slice::from_raw_parts(p, size).iter().all(|&b| b == 0));
                fill(p, size, 3);
                assert!(holds(p, size, 3));
                a.dealloc(p, l);
            }
        }
        // An alignment beyond 2 MiB goes to the system allocator, which honours it.
        let l = layout(3 * HUGE, 2 * HUGE);
        // SAFETY: as in the test above.
        unsafe {
            let p = a.alloc(l);
            assert!(!p.is_null());
            assert_eq!(p as usize % (2 * HUGE), 0);
            fill(p, l.size(), 9);
            assert!(holds(p, l.size(), 9));
            a.dealloc(p, l);
        }
    }

    /// The advice is given: the kernel lists the block's mapping with the `hg` flag ("huge page
    /// advise flag", `VmFlags` in `/proc/PID/smaps`, Documentation/filesystems/proc.rst in the
    /// Linux sources), on every kernel with transparent huge pages. Kernels without them
    /// refuse the advice; the test then checks only that the mapping exists.
    #[cfg(target_os = "linux")]
    #[test]
    fn large_blocks_are_advised_to_use_huge_pages() {
        let a = Advised;
        let l = layout(4 * HUGE, 8);
        // SAFETY: as in the tests above.
        let p = unsafe { a.alloc(l) } as usize;
        assert_ne!(p, 0);
        let smaps = std::fs::read_to_string("/proc/self/smaps").unwrap();
        // Each mapping's lines: a header "start-end perms ...", then "Key: value" lines,
        // VmFlags among them.
        let mut flags = None;
        let mut inside = false;
        for line in smaps.lines() {
            let first = line.split_whitespace().next().unwrap_or("");
            if let Some(f) = line.strip_prefix("VmFlags:") {
                if inside {
                    flags = Some(f.split_whitespace().map(str::to_string).collect::<Vec<_>>());
                    break;
                }
            } else if !first.ends_with(':')
                && let Some((s, e)) = first.split_once('-')
                && let (Ok(s), Ok(e)) = (usize::from_str_radix(s, 16), usize::from_str_radix(e, 16))
            {
                inside = s <= p && p < e;
            }
        }
        let flags = flags.expect("the block's mapping is listed in /proc/self/smaps");
        let thp = std::fs::read_to_string("/sys/kernel/mm/transparent_hugepage/enabled")
            .is_ok_and(|s| !s.contains("[never]"));
        if thp {
            assert!(flags.iter().any(|f| f == "hg"), "flags {flags:?}");
        }
        // SAFETY: as in the tests above.
        unsafe { a.dealloc(p as *mut u8, l) };
    }
}

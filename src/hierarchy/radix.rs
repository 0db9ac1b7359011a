//! The pixel order: a parallel least-significant-digit radix sort of the sweep keys.
//!
//! Keys are built in increasing linear index and every pass is stable, so only the 32-bit
//! value half of a key needs sorting; digits that are the same for every key are skipped. The
//! sorted array of distinct keys is unique, so the result never depends on how the work is
//! split among threads.

use super::engine::sort_key;
use rayon::prelude::*;

/// Bits per digit.
const BITS: u32 = 8;
/// Buckets per digit.
const BUCKETS: usize = 1 << BITS;
/// Digits in the 32-bit value half of a key.
const DIGITS: usize = (32 / BITS) as usize;

/// A pointer to an output buffer that several threads write at disjoint positions.
#[derive(Clone, Copy)]
pub(super) struct Out<T>(pub(super) *mut T);
// SAFETY: every use writes positions that no other thread writes (disjoint bucket ranges
// given by the prefix sums), and the buffer outlives the parallel loop.
unsafe impl<T> Send for Out<T> {}
unsafe impl<T> Sync for Out<T> {}

impl<T> Out<T> {
    /// Writes `v` at `i`.
    ///
    /// # Safety
    /// `i` is in bounds and no other thread writes or reads position `i` meanwhile.
    #[inline(always)]
    pub(super) unsafe fn write(self, i: usize, v: T) {
        // SAFETY: as documented by the caller.
        unsafe { self.0.add(i).write(v) };
    }
}

/// The smallest `f32` at or above `floor` (infinite beyond the `f32` range), so that for every
/// `f32` value `v`, `v as f64 >= floor` exactly when `v >= floor_f32(floor)`: the per-pixel
/// test then stays in single precision, which vectorises. NaN compares false either way.
pub(super) fn floor_f32(floor: f64) -> f32 {
    let f = floor as f32;
    if (f as f64) < floor { f.next_up() } else { f }
}

/// Whether a pixel of value `v` takes part (not NaN and at least the floor, given as
/// [`floor_f32`]).
#[inline(always)]
pub(super) fn considered(v: f32, floor32: f32) -> bool {
    v >= floor32
}

/// Digit `d` of the value half of key `k`.
#[inline(always)]
fn digit(k: u64, d: usize) -> usize {
    ((k >> (32 + BITS as usize * d)) as usize) & (BUCKETS - 1)
}

/// Number of pieces the work is cut into: fixed by the size only.
fn pieces(n: usize) -> usize {
    (n / (1 << 16)).clamp(1, 64)
}

/// Start of piece `i` of `n` items cut into `m` pieces.
fn piece_start(n: usize, m: usize, i: usize) -> usize {
    (n as u128 * i as u128 / m as u128) as usize
}

/// Exclusive prefix sums in bucket-major, piece-minor order: where piece `c` writes its first
/// key of bucket `b`.
fn offsets(hist: &[[usize; BUCKETS]]) -> Vec<[usize; BUCKETS]> {
    let mut off = vec![[0usize; BUCKETS]; hist.len()];
    let mut at = 0;
    for b in 0..BUCKETS {
        for (c, h) in hist.iter().enumerate() {
            off[c][b] = at;
            at += h[b];
        }
    }
    off
}

/// The keys ([`sort_key`]) of the considered pixels of `data`, in increasing order.
pub(super) fn sorted_keys(data: &[f32], floor: f64) -> Vec<u64> {
    sorted_keys_with(data, floor, None)
}

/// [`sorted_keys`] for maps of at most 2^24 pixels, with each pixel's byte of `bytes` packed
/// into the low half of its key: `index << 8 | byte`. Only the value half is sorted (stably,
/// keys made in increasing index), so the order is that of [`sorted_keys`]. The bytes are
/// freed once copied into the keys, before the sort's second buffer is made.
pub(super) fn sorted_keys_packed(data: &[f32], floor: f64, bytes: Vec<u8>) -> Vec<u64> {
    assert!(data.len() <= 1 << 24 && bytes.len() == data.len());
    sorted_keys_with(data, floor, Some(bytes))
}

fn sorted_keys_with(data: &[f32], floor: f64, bytes: Option<Vec<u8>>) -> Vec<u64> {
    let npix = data.len();
    let floor = floor_f32(floor);
    let m = pieces(npix);
    // Histograms of every digit, per piece of the map.
    let hists: Vec<[[usize; BUCKETS]; DIGITS]> = (0..m)
        .into_par_iter()
        .map(|c| {
            let mut h = [[0usize; BUCKETS]; DIGITS];
            let (a, b) = (piece_start(npix, m, c), piece_start(npix, m, c + 1));
            for (i, &v) in data[a..b].iter().enumerate() {
                if considered(v, floor) {
                    let k = sort_key(v, a + i);
                    for (d, hd) in h.iter_mut().enumerate() {
                        hd[digit(k, d)] += 1;
                    }
                }
            }
            h
        })
        .collect();
    let n: usize = hists.iter().map(|h| h[0].iter().sum::<usize>()).sum();
    let passes: Vec<usize> = (0..DIGITS)
        .filter(|&d| {
            let mut tot = [0usize; BUCKETS];
            for h in &hists {
                for (t, &x) in tot.iter_mut().zip(&h[d]) {
                    *t += x;
                }
            }
            !tot.contains(&n)
        })
        .collect();

    // First pass straight from the map (or, with nothing to sort, the keys in index order).
    let mut src: Vec<u64> = Vec::with_capacity(n);
    {
        let first_hist: Vec<[usize; BUCKETS]> = match passes.first() {
            Some(&d) => hists.iter().map(|h| h[d]).collect(),
            None => hists
                .iter()
                .map(|h| {
                    let mut one = [0usize; BUCKETS];
                    one[0] = h[0].iter().sum();
                    one
                })
                .collect(),
        };
        let d0 = passes.first().copied();
        let off = offsets(&first_hist);
        let out = Out(src.as_mut_ptr());
        off.into_par_iter().enumerate().for_each(|(c, mut o)| {
            let (a, b) = (piece_start(npix, m, c), piece_start(npix, m, c + 1));
            for (i, &v) in data[a..b].iter().enumerate() {
                if considered(v, floor) {
                    let k = match &bytes {
                        Some(b) => {
                            sort_key(v, 0) | u64::from(((a + i) as u32) << 8 | u32::from(b[a + i]))
                        }
                        None => sort_key(v, a + i),
                    };
                    let bk = d0.map_or(0, |d| digit(k, d));
                    // SAFETY: piece `c` owns positions o[bk].. up to its count in bucket bk.
                    unsafe { out.write(o[bk], k) };
                    o[bk] += 1;
                }
            }
        });
        // SAFETY: the pieces wrote every one of the `n` positions (the offsets cover 0..n).
        unsafe { src.set_len(n) };
    }
    drop(bytes);
    if passes.len() <= 1 {
        return src;
    }
    let mut dst: Vec<u64> = Vec::with_capacity(n);
    let m = pieces(n);
    for &d in &passes[1..] {
        let hist: Vec<[usize; BUCKETS]> = (0..m)
            .into_par_iter()
            .map(|c| {
                let mut h = [0usize; BUCKETS];
                for &k in &src[piece_start(n, m, c)..piece_start(n, m, c + 1)] {
                    h[digit(k, d)] += 1;
                }
                h
            })
            .collect();
        let off = offsets(&hist);
        dst.clear();
        let out = Out(dst.as_mut_ptr());
        let src_ref = &src;
        off.into_par_iter().enumerate().for_each(|(c, mut o)| {
            for &k in &src_ref[piece_start(n, m, c)..piece_start(n, m, c + 1)] {
                let bk = digit(k, d);
                // SAFETY: piece `c` owns positions o[bk].. up to its count in bucket bk.
                unsafe { out.write(o[bk], k) };
                o[bk] += 1;
            }
        });
        // SAFETY: the pieces wrote every one of the `n` positions.
        unsafe { dst.set_len(n) };
        std::mem::swap(&mut src, &mut dst);
    }
    src
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reference(data: &[f32], floor: f64) -> Vec<u64> {
        let mut k: Vec<u64> = data
            .iter()
            .enumerate()
            .filter(|&(_, &v)| !v.is_nan() && v as f64 >= floor)
            .map(|(i, &v)| sort_key(v, i))
            .collect();
        k.sort_unstable();
        k
    }

    #[test]
    fn single_precision_floor_test_equals_the_double_one() {
        let mut s = 99u64;
        let mut next = || {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            s
        };
        let mut floors = vec![
            f64::NEG_INFINITY,
            f64::INFINITY,
            0.0,
            -0.0,
            1e300,
            -1e300,
            f32::MAX as f64,
            f32::MIN_POSITIVE as f64 / 3.0,
            3e21,
        ];
        for _ in 0..2000 {
            let b = next();
            floors.push(f64::from_bits(b));
            // Doubles within a few units of an f32 value, and exactly on one.
            let f = f32::from_bits((b >> 32) as u32) as f64;
            floors.push(f);
            floors.push(f64::from_bits(f.to_bits().wrapping_add(b % 3)));
            floors.push(f64::from_bits(f.to_bits().wrapping_sub(b % 3)));
        }
        for floor in floors.into_iter().filter(|f| !f.is_nan()) {
            let f32_floor = floor_f32(floor);
            let near = [
                f32_floor,
                f32_floor.next_up(),
                f32_floor.next_down(),
                floor as f32,
                (floor as f32).next_down(),
                (floor as f32).next_up(),
                f32::NAN,
                f32::INFINITY,
                f32::NEG_INFINITY,
                0.0,
                -0.0,
            ];
            for v in near {
                assert_eq!(
                    considered(v, f32_floor),
                    !v.is_nan() && v as f64 >= floor,
                    "v {v:e} floor {floor:e}"
                );
            }
        }
    }

    #[test]
    fn radix_order_matches_a_comparison_sort() {
        let mut s = 12345u64;
        let mut next = || {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (s >> 33) as u32
        };
        for &n in &[0usize, 1, 7, 1000, 70_000, 300_001] {
            for kind in 0..5 {
                let data: Vec<f32> = (0..n)
                    .map(|_| {
                        let r = next();
                        match kind {
                            0 => f32::from_bits(r),
                            1 => (r % 7) as f32 - 3.0,
                            2 => 5.0,
                            3 => {
                                if r % 5 == 0 {
                                    f32::NAN
                                } else if r % 5 == 1 {
                                    -0.0
                                } else {
                                    (r as f32 / u32::MAX as f32) - 0.5
                                }
                            }
                            _ => 1e21 * (1.0 + (r % 1000) as f32 / 100.0),
                        }
                    })
                    .collect();
                for &floor in &[f64::NEG_INFINITY, 0.0, 1e21, f64::INFINITY] {
                    let want = reference(&data, floor);
                    assert_eq!(
                        sorted_keys(&data, floor),
                        want,
                        "n {n} kind {kind} floor {floor}"
                    );
                    let bytes: Vec<u8> = (0..n).map(|i| (i * 37 % 256) as u8).collect();
                    let packed: Vec<u64> = want
                        .iter()
                        .map(|&k| {
                            let i = k as u32 as usize;
                            (k & !0xffff_ffff) | ((i as u64) << 8) | bytes[i] as u64
                        })
                        .collect();
                    assert_eq!(
                        sorted_keys_packed(&data, floor, bytes),
                        packed,
                        "packed n {n} kind {kind} floor {floor}"
                    );
                    if n > 1000 && floor == 0.0 {
                        for threads in [1, 3] {
                            let pool = rayon::ThreadPoolBuilder::new()
                                .num_threads(threads)
                                .build()
                                .unwrap();
                            assert_eq!(
                                pool.install(|| sorted_keys(&data, floor)),
                                want,
                                "n {n} kind {kind} threads {threads}"
                            );
                        }
                    }
                }
            }
        }
    }
}

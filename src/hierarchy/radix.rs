//! The pixel order: a radix sort of the sweep keys in two stages, so that the sweep can start
//! before the sort ends.
//!
//! A parallel pass scatters the keys into buckets by the most significant bits in which their
//! values differ ([`bucketed_keys_packed`], [`bucketed_keys_wide`]); each bucket is then
//! sorted on the remaining bits by a least-significant-digit radix sort in the processor's
//! cache ([`sort_bucket`]), bucket after bucket, while the sweep works through the buckets
//! already sorted. Keys are built in increasing linear index and every pass is stable, so
//! only the value bits of a key need sorting; digits that are the same for a whole bucket are
//! skipped. The sorted array of distinct keys is unique, so the result never depends on how
//! the work is split among threads or on which thread sorts which bucket.

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

/// Digit `d` of the value bits of key `k`, which start at bit `shift`.
#[inline(always)]
fn digit(k: u64, shift: u32, d: usize) -> usize {
    ((k >> (shift as usize + BITS as usize * d)) as usize) & (BUCKETS - 1)
}

/// Number of pieces the work is cut into: fixed by the size only.
fn pieces(n: usize) -> usize {
    (n / (1 << 16)).clamp(1, 64)
}

/// Start of piece `i` of `n` items cut into `m` pieces.
fn piece_start(n: usize, m: usize, i: usize) -> usize {
    (n as u128 * i as u128 / m as u128) as usize
}

/// The considered pixels' keys grouped by the leading bits of their value half, the bits in
/// which the keys differ first: bucket after bucket in increasing key order, and within a
/// bucket in increasing index (not yet sorted on the lower bits; see [`sort_bucket`]).
pub(super) struct Buckets {
    /// The keys, bucket after bucket.
    pub(super) keys: Vec<u64>,
    /// Bucket `b` is `keys[starts[b]..starts[b + 1]]`.
    pub(super) starts: Vec<usize>,
    /// How many keys have a zero byte: considered pixels with no earlier neighbour, each of
    /// which starts a component (a candidate peak) in the sweep.
    pub(super) peaks: usize,
    /// Where the keys keep their value.
    pub(super) bits: KeyBits,
}

/// Where the keys of [`Buckets`] keep their value.
#[derive(Clone, Copy)]
pub(super) struct KeyBits {
    /// The bits of the value half below the bucket digit, still to be sorted in each bucket.
    pub(super) low_bits: u32,
    /// The bit of a key where its value bits start: 32 when the key holds the whole value
    /// half ([`bucketed_keys_packed`]), `8 + index bits` when it holds only
    /// the `low_bits` below the bucket digit ([`bucketed_keys_wide`]).
    pub(super) value_shift: u32,
    /// The bits of the value half above the bucket digit, the same for every key.
    pub(super) value_prefix: u32,
}

impl KeyBits {
    /// The value half (the high half of [`sort_key`]) of a key of bucket `b`: the prefix and
    /// the bucket digit above the key's value bits (a key that holds the whole value half
    /// holds those two already, so setting them again changes nothing).
    #[inline(always)]
    pub(super) fn value_half(&self, b: usize, key: u64) -> u32 {
        self.value_prefix | ((b as u32) << self.low_bits) | (key >> self.value_shift) as u32
    }
}

/// Bits that hold any index below `npix` (at least one).
pub(super) fn index_bits(npix: usize) -> u32 {
    (usize::BITS - npix.saturating_sub(1).leading_zeros()).max(1)
}

/// Bits of the bucket digit for a map of `npix` pixels: buckets of a few thousand keys on
/// average, which [`sort_bucket`] sorts in the processor's cache, and at most 4096 of them, so
/// that the scattering pass writes to a few thousand places at once. Fixed by the size only.
fn bucket_bits(npix: usize) -> u32 {
    (npix.max(1).ilog2().saturating_sub(11)).clamp(1, 12)
}

/// The keys of the considered pixels of `data` (`ncols` columns) in buckets, for maps of at
/// most 2^24 pixels: the value half of [`sort_key`] above `index << 8 | byte` (which orders as
/// the bare index does), a byte per pixel packed into the key. `rows(y)` gives a generator of
/// the bytes of rows `y`, `y + 1`, ... (one call per row, each filling `ncols` bytes), so the
/// bytes are made piece by piece while the keys are scattered and never all held at once.
/// One parallel pass counts the pixels of each bucket, one scatters the keys, each piece of
/// rows writing its keys of a bucket in index order after those of the pieces before it.
/// `range` is the lowest and highest considered value (`None` if no pixel is considered).
///
/// The buckets follow the most significant digit of the keys' value half among the bits that
/// vary between the lowest and the highest considered value, so a map whose values span a
/// narrow range still spreads over every bucket.
pub(super) fn bucketed_keys_packed<F, R>(
    data: &[f32],
    ncols: usize,
    floor: f64,
    range: Option<(f32, f32)>,
    rows: &F,
) -> Buckets
where
    F: Fn(usize) -> R + Sync,
    R: FnMut(&mut [u8]),
{
    assert!(data.len() <= 1 << 24);
    bucketed(data, ncols, floor, range, rows, false)
}

/// [`bucketed_keys_packed`] for maps of any size: a key holds only the bits of its value half
/// below the bucket digit (the bucket gives the rest; see [`KeyBits::value_half`]), above
/// `index << 8 | byte`. The buckets take 12 bits on maps above 2^24 pixels, so at most 20
/// value bits, 31 index bits and the byte share the 64 (smaller maps need at most 31, 24
/// and 8); the keys of a bucket order as the full keys do.
pub(super) fn bucketed_keys_wide<F, R>(
    data: &[f32],
    ncols: usize,
    floor: f64,
    range: Option<(f32, f32)>,
    rows: &F,
) -> Buckets
where
    F: Fn(usize) -> R + Sync,
    R: FnMut(&mut [u8]),
{
    bucketed(data, ncols, floor, range, rows, true)
}

fn bucketed<F, R>(
    data: &[f32],
    ncols: usize,
    floor: f64,
    range: Option<(f32, f32)>,
    rows: &F,
    wide: bool,
) -> Buckets
where
    F: Fn(usize) -> R + Sync,
    R: FnMut(&mut [u8]),
{
    let npix = data.len();
    let ncols = ncols.max(1);
    let nrows = npix / ncols;
    let floor = floor_f32(floor);
    // The value halves of the highest and the lowest value's keys: every key's value half lies
    // between them, so the bits above their highest differing bit are the same for all.
    let (first, last) = range.map_or((0, 0), |(lo, hi)| {
        (
            (sort_key(hi, 0) >> 32) as u32,
            (sort_key(lo, 0) >> 32) as u32,
        )
    });
    let span = 32 - (first ^ last).leading_zeros();
    let bits = bucket_bits(npix).min(span);
    let low_bits = span - bits;
    let nb = 1usize << bits;
    let bucket = move |k: u64| (((k >> 32) as u32 >> low_bits) as usize) & (nb - 1);
    let value_prefix = if span == 32 { 0 } else { first >> span << span };
    // The value bits a key keeps: those below the bucket digit, or the whole value half.
    let (value_shift, value_mask) = if wide {
        (8 + index_bits(npix), (1u64 << low_bits) - 1)
    } else {
        (32, u64::from(u32::MAX))
    };
    assert!(!wide || value_shift + low_bits <= 64);
    // Pieces of whole rows (their number fixed by the size only).
    let m = pieces(npix);
    let piece_rows = |c: usize| (piece_start(nrows, m, c), piece_start(nrows, m, c + 1));
    let hist: Vec<Vec<usize>> = (0..m)
        .into_par_iter()
        .map(|c| {
            let mut h = vec![0usize; nb];
            let (y0, y1) = piece_rows(c);
            for &v in &data[y0 * ncols..y1 * ncols] {
                if considered(v, floor) {
                    h[bucket(sort_key(v, 0))] += 1;
                }
            }
            h
        })
        .collect();
    // Where piece `c` writes its first key of bucket `b`: bucket-major, piece-minor.
    let mut starts = Vec::with_capacity(nb + 1);
    let mut off = vec![vec![0usize; nb]; m];
    let mut at = 0;
    for b in 0..nb {
        starts.push(at);
        for (c, h) in hist.iter().enumerate() {
            off[c][b] = at;
            at += h[b];
        }
    }
    starts.push(at);
    let n = at;
    let mut keys: Vec<u64> = Vec::with_capacity(n);
    let out = Out(keys.as_mut_ptr());
    let peaks = off
        .into_par_iter()
        .enumerate()
        .map(|(c, mut o)| {
            let (y0, y1) = piece_rows(c);
            let mut peaks = 0;
            // Key `k` into bucket `bk`.
            let mut put = |bk: usize, k: u64| {
                // SAFETY: piece `c` owns positions o[bk].. up to its count in bucket bk.
                unsafe { out.write(o[bk], k) };
                o[bk] += 1;
            };
            let mut next_row = rows(y0);
            let mut bytes = vec![0u8; ncols];
            for y in y0..y1 {
                next_row(&mut bytes);
                let row = &data[y * ncols..(y + 1) * ncols];
                for (x, (&v, &byte)) in row.iter().zip(&bytes).enumerate() {
                    if considered(v, floor) {
                        peaks += usize::from(byte == 0);
                        let i = (y * ncols + x) as u64;
                        let k = sort_key(v, 0);
                        let value = ((k >> 32) & value_mask) << value_shift;
                        put(bucket(k), value | i << 8 | u64::from(byte));
                    }
                }
            }
            peaks
        })
        .sum();
    // SAFETY: the pieces wrote every one of the `n` positions (the offsets cover 0..n).
    unsafe { keys.set_len(n) };
    Buckets {
        keys,
        starts,
        peaks,
        bits: KeyBits {
            low_bits,
            value_shift,
            value_prefix,
        },
    }
}

/// Buckets of at most this many keys are sorted by insertion.
const SMALL_BUCKET: usize = 32;

/// Sorts one bucket of [`bucketed_keys_packed`] or [`bucketed_keys_wide`] on its keys'
/// `low_bits` lowest value bits: a least-significant-digit radix sort (8-bit digits, each
/// pass stable, digits the same for the whole bucket skipped), so keys of equal value stay in
/// index order. `scratch` is reused between buckets.
pub(super) fn sort_bucket(keys: &mut [u64], bits: KeyBits, scratch: &mut Vec<u64>) {
    let (low_bits, shift) = (bits.low_bits, bits.value_shift);
    let n = keys.len();
    if n <= 1 || low_bits == 0 {
        return;
    }
    if n <= SMALL_BUCKET {
        // Keys are distinct (the low half holds the index), so this is the same order.
        for i in 1..n {
            let k = keys[i];
            let mut j = i;
            while j > 0 && keys[j - 1] > k {
                keys[j] = keys[j - 1];
                j -= 1;
            }
            keys[j] = k;
        }
        return;
    }
    let passes = low_bits.div_ceil(BITS) as usize;
    let mut hist = [[0u32; BUCKETS]; DIGITS];
    for &k in keys.iter() {
        for (d, h) in hist[..passes].iter_mut().enumerate() {
            h[digit(k, shift, d)] += 1;
        }
    }
    if scratch.len() < n {
        scratch.resize(n, 0);
    }
    let scratch = &mut scratch[..n];
    let mut in_keys = true;
    for (d, h) in hist[..passes].iter().enumerate() {
        if h.contains(&(n as u32)) {
            continue;
        }
        let mut off = [0u32; BUCKETS];
        let mut at = 0;
        for (o, &c) in off.iter_mut().zip(h) {
            *o = at;
            at += c;
        }
        let (src, dst): (&[u64], &mut [u64]) = if in_keys {
            (keys, scratch)
        } else {
            (scratch, keys)
        };
        for &k in src {
            let b = digit(k, shift, d);
            dst[off[b] as usize] = k;
            off[b] += 1;
        }
        in_keys = !in_keys;
    }
    if !in_keys {
        keys.copy_from_slice(scratch);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The considered pixels of `data` in the sweep's order, as (value half of [`sort_key`],
    /// index, byte) decoded from the sorted buckets, the bytes of `bytes` handed over row by
    /// row: the packed layout (at most 2^24 pixels) or the wide one.
    fn sorted(
        data: &[f32],
        ncols: usize,
        floor: f64,
        bytes: &[u8],
        wide: bool,
    ) -> Vec<(u32, u32, u8)> {
        let range = value_range(data, floor_f32(floor));
        let rows = |y0: usize| {
            let mut y = y0;
            move |out: &mut [u8]| {
                out.copy_from_slice(&bytes[y * ncols..(y + 1) * ncols]);
                y += 1;
            }
        };
        let mut b = if wide {
            bucketed_keys_wide(data, ncols, floor, range, &rows)
        } else {
            bucketed_keys_packed(data, ncols, floor, range, &rows)
        };
        let index_mask = (1u64 << index_bits(data.len())) - 1;
        let mut scratch = Vec::new();
        let mut out = Vec::new();
        for i in 0..b.starts.len() - 1 {
            let (a, e) = (b.starts[i], b.starts[i + 1]);
            sort_bucket(&mut b.keys[a..e], b.bits, &mut scratch);
            for &k in &b.keys[a..e] {
                out.push((
                    b.bits.value_half(i, k),
                    ((k >> 8) & index_mask) as u32,
                    k as u8,
                ));
            }
        }
        out
    }

    /// The lowest and highest values of the considered pixels (`None` if there are none).
    fn value_range(data: &[f32], floor32: f32) -> Option<(f32, f32)> {
        let (lo, hi) = data
            .par_chunks(1 << 16)
            .map(|c| {
                let (mut lo, mut hi) = (f32::INFINITY, f32::NEG_INFINITY);
                for &v in c.iter().filter(|&&v| considered(v, floor32)) {
                    lo = lo.min(v);
                    hi = hi.max(v);
                }
                (lo, hi)
            })
            .reduce(
                || (f32::INFINITY, f32::NEG_INFINITY),
                |a, b| (a.0.min(b.0), a.1.max(b.1)),
            );
        (lo <= hi).then_some((lo, hi))
    }

    /// The order by a comparison sort of the full keys, as (value half, index, byte).
    fn reference(data: &[f32], floor: f64, bytes: &[u8]) -> Vec<(u32, u32, u8)> {
        let mut k: Vec<u64> = data
            .iter()
            .enumerate()
            .filter(|&(_, &v)| !v.is_nan() && v as f64 >= floor)
            .map(|(i, &v)| sort_key(v, i))
            .collect();
        k.sort_unstable();
        k.iter()
            .map(|&k| ((k >> 32) as u32, k as u32, bytes[k as u32 as usize]))
            .collect()
    }

    #[test]
    fn single_precision_floor_test_equals_the_double_one() {
        let mut next = crate::hierarchy::test_lcg(99);
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
        let mut lcg = crate::hierarchy::test_lcg(12345);
        let mut next = || (lcg() >> 33) as u32;
        // (pixels, columns): one row, several rows, many pieces of rows.
        for &(n, ncols) in &[
            (0usize, 1usize),
            (1, 1),
            (7, 7),
            (1000, 40),
            (70_000, 700),
            (300_001, 300_001),
            (300_000, 600),
        ] {
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
                let bytes: Vec<u8> = (0..n).map(|i| (i * 37 % 256) as u8).collect();
                for &floor in &[f64::NEG_INFINITY, 0.0, 1e21, f64::INFINITY] {
                    let want = reference(&data, floor, &bytes);
                    for wide in [false, true] {
                        assert_eq!(
                            sorted(&data, ncols, floor, &bytes, wide),
                            want,
                            "n {n} x {ncols} kind {kind} floor {floor} wide {wide}"
                        );
                    }
                    if n > 1000 && floor == 0.0 {
                        for threads in [1, 3] {
                            let pool = rayon::ThreadPoolBuilder::new()
                                .num_threads(threads)
                                .build()
                                .unwrap();
                            assert_eq!(
                                pool.install(|| sorted(&data, ncols, floor, &bytes, true)),
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

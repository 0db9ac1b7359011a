//! The map as an image: display limits, stretch, colour map, and area-averaged resampling to
//! the figure's resolution.

use super::{ColorMap, Limits, RenderError, Stretch, Style};
use ndarray::ArrayView2;
use rayon::prelude::*;

/// Colour of missing pixels (NaN): a neutral light grey.
pub(crate) const MISSING: [u8; 3] = [204, 204, 204];

/// The data values shown at the bottom and top of the colour scale.
pub fn display_limits(map: ArrayView2<f32>, limits: Limits) -> Result<(f64, f64), RenderError> {
    let (lo, hi) = match limits {
        Limits::Values(lo, hi) => {
            if lo > hi {
                return Err(RenderError::BadStyle(format!(
                    "the lower display limit {lo} is above the upper one {hi}; swap them"
                )));
            }
            (lo, hi)
        }
        Limits::Percentiles(plo, phi) => {
            if !(0.0..=100.0).contains(&plo) || !(0.0..=100.0).contains(&phi) || plo >= phi {
                return Err(RenderError::BadStyle(format!(
                    "percentile limits must satisfy 0 <= low < high <= 100, got ({plo}, {phi})"
                )));
            }
            let [lo, hi] = percentiles(map, [plo, phi]).ok_or(RenderError::NoData)?;
            (lo as f64, hi as f64)
        }
    };
    if !lo.is_finite() || !hi.is_finite() {
        return Err(RenderError::BadStyle(
            "display limits must be finite".into(),
        ));
    }
    if hi > lo {
        Ok((lo, hi))
    } else {
        // A flat map: widen so the colour scale is still defined.
        let pad = if lo == 0.0 { 1.0 } else { lo.abs() * 1e-3 };
        Ok((lo - pad, lo + pad))
    }
}

/// A 32-bit key of a finite value that orders as [`f32::total_cmp`].
#[inline]
fn total_key(v: f32) -> u32 {
    let b = v.to_bits();
    if b >> 31 == 1 { !b } else { b | 0x8000_0000 }
}

/// The value of a [`total_key`].
fn from_total_key(k: u32) -> f32 {
    f32::from_bits(if k >> 31 == 1 { k & 0x7fff_ffff } else { !k })
}

/// Counts of the finite values of `map` by `slot` of their key ([`total_key`]), `len` slots;
/// a key whose slot is `None` is not counted.
fn key_histogram(
    map: ArrayView2<f32>,
    len: usize,
    slot: impl Fn(u32) -> Option<usize> + Sync,
) -> Vec<u64> {
    let count = |h: &mut Vec<u64>, v: f32| {
        if v.is_finite()
            && let Some(i) = slot(total_key(v))
        {
            h[i] += 1;
        }
    };
    let add = |mut a: Vec<u64>, b: Vec<u64>| {
        for (x, y) in a.iter_mut().zip(b) {
            *x += y;
        }
        a
    };
    match map.as_slice() {
        Some(s) => s
            .par_chunks(1 << 20)
            .fold(
                || vec![0u64; len],
                |mut h, c| {
                    c.iter().for_each(|&v| count(&mut h, v));
                    h
                },
            )
            .reduce(|| vec![0u64; len], add),
        None => map.iter().fold(vec![0u64; len], |mut h, &v| {
            count(&mut h, v);
            h
        }),
    }
}

/// The values at two percentiles (0-100) of the finite values of `map`, each the value of rank
/// round(p / 100 * (n - 1)) in increasing order, or `None` if no value is finite. Exact, in two
/// passes without copying the values: the ranks' upper 16 key bits from one histogram, their
/// lower 16 from a second over the values sharing those upper bits.
fn percentiles(map: ArrayView2<f32>, p: [f64; 2]) -> Option<[f32; 2]> {
    const HALF: usize = 1 << 16;
    let top = key_histogram(map, HALF, |k| Some((k >> 16) as usize));
    let n: u64 = top.iter().sum();
    if n == 0 {
        return None;
    }
    let pick = |hist: &[u64], rank: u64| -> (u32, u64) {
        let mut below = 0;
        for (b, &c) in hist.iter().enumerate() {
            if rank < below + c {
                return (b as u32, rank - below);
            }
            below += c;
        }
        unreachable!("the rank is below the count")
    };
    let [(b0, r0), (b1, r1)] =
        p.map(|pc| pick(&top, ((pc / 100.0) * (n - 1) as f64).round() as u64));
    // The lower bits of the keys in the two ranks' buckets, side by side (the first bucket's
    // half serves both when they are the same bucket).
    let low = key_histogram(map, 2 * HALF, |k| {
        let lo = (k & 0xffff) as usize;
        if k >> 16 == b0 {
            Some(lo)
        } else if k >> 16 == b1 {
            Some(HALF + lo)
        } else {
            None
        }
    });
    let second = if b1 == b0 { &low[..HALF] } else { &low[HALF..] };
    let (l0, _) = pick(&low[..HALF], r0);
    let (l1, _) = pick(second, r1);
    Some([from_total_key(b0 << 16 | l0), from_total_key(b1 << 16 | l1)])
}

/// Maps a data value to [0, 1] on the colour scale.
#[derive(Debug, Clone, Copy)]
pub struct Scale {
    pub lo: f64,
    pub hi: f64,
    pub stretch: Stretch,
}

/// Softening of the asinh stretch (as a fraction of the range).
const ASINH_SOFT: f64 = 0.1;
/// Dynamic range of the log stretch when the lower limit is not positive.
const LOG_RANGE: f64 = 1000.0;

impl Scale {
    /// Position in [0, 1] of value `v`, or NaN for NaN.
    pub fn pos(&self, v: f64) -> f64 {
        if v.is_nan() {
            return f64::NAN;
        }
        let t = ((v - self.lo) / (self.hi - self.lo)).clamp(0.0, 1.0);
        match self.stretch {
            Stretch::Linear => t,
            Stretch::Sqrt => t.sqrt(),
            Stretch::Log => {
                if self.lo > 0.0 {
                    (v.clamp(self.lo, self.hi) / self.lo).ln() / (self.hi / self.lo).ln()
                } else {
                    (1.0 + LOG_RANGE * t).ln() / (1.0 + LOG_RANGE).ln()
                }
            }
            Stretch::Asinh => (t / ASINH_SOFT).asinh() / (1.0 / ASINH_SOFT).asinh(),
        }
    }
}

/// A lookup table of 1024 colours along the colour map.
pub(crate) struct Lut(Vec<[u8; 3]>);

impl Lut {
    pub fn new(cm: ColorMap) -> Self {
        let n = 1024;
        Lut((0..n)
            .map(|i| color_at(cm, i as f64 / (n - 1) as f64))
            .collect())
    }
    #[inline]
    pub fn get(&self, t: f64) -> [u8; 3] {
        if t.is_nan() {
            return MISSING;
        }
        let i = (t * (self.0.len() - 1) as f64).round() as usize;
        self.0[i.min(self.0.len() - 1)]
    }
}

/// Colour at position t in [0, 1] of a colour map.
pub(crate) fn color_at(cm: ColorMap, t: f64) -> [u8; 3] {
    let g = match cm {
        ColorMap::Viridis => colorous::VIRIDIS,
        ColorMap::Inferno => colorous::INFERNO,
        ColorMap::Magma => colorous::MAGMA,
        ColorMap::Cividis => colorous::CIVIDIS,
        ColorMap::Grey => {
            let v = (t.clamp(0.0, 1.0) * 255.0).round() as u8;
            return [v, v, v];
        }
    };
    let c = g.eval_continuous(t.clamp(0.0, 1.0));
    [c.r, c.g, c.b]
}

/// Colour-maps a whole array at its own resolution (RGB bytes, row 0 of the map last so the
/// image has north up). This is the reference operation timed by the benchmark.
pub fn colorize(map: ArrayView2<f32>, style: &Style) -> Result<Vec<u8>, RenderError> {
    let (lo, hi) = display_limits(map, style.limits)?;
    let scale = Scale {
        lo,
        hi,
        stretch: style.stretch,
    };
    Ok(colorize_with(map, &scale, &Lut::new(style.colormap)))
}

/// Colour-maps `map` at its own resolution with a scale and colour table already chosen (RGB
/// bytes, row 0 of the map last so the image has north up).
pub(crate) fn colorize_with(map: ArrayView2<f32>, scale: &Scale, lut: &Lut) -> Vec<u8> {
    let (h, w) = map.dim();
    let mut out = vec![0u8; w * h * 3];
    out.par_chunks_mut(w * 3).enumerate().for_each(|(j, row)| {
        let src = map.row(h - 1 - j);
        for (px, &v) in row.chunks_exact_mut(3).zip(src.iter()) {
            px.copy_from_slice(&lut.get(scale.pos(v as f64)));
        }
    });
    out
}

/// For each output cell along one axis, the source cells it covers and their weights.
/// `n_src` source cells are shown in `n_out` output cells. When there are more source than
/// output cells the weights are the overlap lengths (area averaging); otherwise each output
/// cell takes the source cell under its centre, so enlarged pixels stay crisp.
fn taps(n_src: usize, n_out: usize) -> Vec<Vec<(usize, f32)>> {
    let r = n_src as f64 / n_out as f64;
    (0..n_out)
        .map(|i| {
            if r <= 1.0 {
                let c = ((i as f64 + 0.5) * r).floor() as usize;
                vec![(c.min(n_src - 1), 1.0)]
            } else {
                let a = i as f64 * r;
                let b = (i + 1) as f64 * r;
                let mut v = Vec::new();
                let mut k = a.floor() as usize;
                while (k as f64) < b && k < n_src {
                    let lo = a.max(k as f64);
                    let hi = b.min((k + 1) as f64);
                    if hi > lo {
                        v.push((k, (hi - lo) as f32));
                    }
                    k += 1;
                }
                v
            }
        })
        .collect()
}

/// Resamples `map` (rows = y, row 0 at the bottom) to `out_w` x `out_h` display pixels with
/// row 0 at the top, averaging the finite values under each display pixel (NaN where none).
pub(crate) fn resample(map: ArrayView2<f32>, out_w: usize, out_h: usize) -> Vec<f32> {
    let (h, w) = map.dim();
    let tx = taps(w, out_w);
    let ty = taps(h, out_h);
    let mut out = vec![f32::NAN; out_w * out_h];
    out.par_chunks_mut(out_w).enumerate().for_each(|(j, row)| {
        // Display row j counts from the top; map rows count from the bottom.
        let ys: Vec<(usize, f32)> = ty[out_h - 1 - j].iter().map(|&(k, wgt)| (k, wgt)).collect();
        for (i, o) in row.iter_mut().enumerate() {
            let mut s = 0.0f64;
            let mut ws = 0.0f64;
            for &(yk, wy) in &ys {
                let src = map.row(yk);
                for &(xk, wx) in &tx[i] {
                    let v = src[xk];
                    if v.is_finite() {
                        let wgt = (wx * wy) as f64;
                        s += v as f64 * wgt;
                        ws += wgt;
                    }
                }
            }
            if ws > 0.0 {
                *o = (s / ws) as f32;
            }
        }
    });
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn area_average_preserves_the_mean_and_skips_missing() {
        let mut m = Array2::<f32>::zeros((4, 6));
        for ((y, x), v) in m.indexed_iter_mut() {
            *v = (x + 10 * y) as f32;
        }
        m[[0, 0]] = f32::NAN;
        let r = resample(m.view(), 3, 2);
        // Bottom-left display pixel (last row) averages map rows 0-1, columns 0-1 without NaN.
        let expect = (1.0 + 10.0 + 11.0) / 3.0;
        assert!((r[3] - expect).abs() < 1e-5, "{}", r[3]);
        // Top-right display pixel: rows 2-3, columns 4-5.
        let expect = (24.0 + 25.0 + 34.0 + 35.0) / 4.0;
        assert!((r[2] - expect).abs() < 1e-5);
    }

    #[test]
    fn percentiles_by_histogram_equal_a_full_selection() {
        let mut state = 12345u64;
        for case in 0..40 {
            let (h, w) = (1 + case % 7, 3 + case * 13 % 50);
            let m = Array2::from_shape_fn((h, w), |_| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                let u = (state >> 40) as u32;
                match u % 9 {
                    0 => f32::NAN,
                    1 => 0.0,
                    2 => -0.0,
                    3 => f32::from_bits(u),
                    4 => f32::INFINITY,
                    _ => (u % 1000) as f32 * if u.is_multiple_of(2) { 1.0 } else { -1e-3 },
                }
            });
            let mut v: Vec<f32> = m.iter().copied().filter(|x| x.is_finite()).collect();
            v.sort_by(f32::total_cmp);
            for p in [0.0, 0.5, 13.0, 50.0, 99.5, 100.0] {
                // The same percentile twice (one bucket) and beside another (two buckets).
                let got = percentiles(m.view(), [p, p]);
                let pair = percentiles(m.view(), [p, 100.0 - p]);
                if v.is_empty() {
                    assert!(got.is_none());
                    continue;
                }
                let rank = ((p / 100.0) * (v.len() - 1) as f64).round() as usize;
                let other = (((100.0 - p) / 100.0) * (v.len() - 1) as f64).round() as usize;
                let pair = pair.unwrap();
                assert_eq!(pair[0].to_bits(), v[rank].to_bits(), "case {case} p {p}");
                assert_eq!(pair[1].to_bits(), v[other].to_bits(), "case {case} p {p}");
                assert_eq!(
                    got.unwrap()[0].to_bits(),
                    v[rank].to_bits(),
                    "case {case} p {p}"
                );
            }
        }
    }

    #[test]
    fn percentile_limits_and_stretches() {
        let m = Array2::from_shape_fn((10, 10), |(y, x)| (y * 10 + x) as f32);
        let (lo, hi) = display_limits(m.view(), Limits::Percentiles(0.0, 100.0)).unwrap();
        assert_eq!((lo, hi), (0.0, 99.0));
        for st in [Stretch::Linear, Stretch::Sqrt, Stretch::Log, Stretch::Asinh] {
            let s = Scale {
                lo: 1.0,
                hi: 100.0,
                stretch: st,
            };
            assert!(s.pos(1.0).abs() < 1e-12);
            assert!((s.pos(100.0) - 1.0).abs() < 1e-12);
            assert!(s.pos(10.0) > 0.0 && s.pos(10.0) < 1.0);
        }
    }
}

//! A robust estimate of a map's noise.
//!
//! Owns the default noise estimate used to turn `3sigma`-style thresholds into map units, and
//! a second, independent estimate shown beside it as a sanity check.
//!
//! * **Clipped estimate (the default).** Iterative sigma clipping about the median with the
//!   scaled median absolute deviation as the width (Hampel 1974, JASA 69, 383; Rousseeuw &
//!   Croux 1993, JASA 88, 1273): at each pass, keep pixels within 3 widths of the median,
//!   until no pixel is removed or 10 passes are made; the noise is the standard deviation of
//!   the pixels kept. This is the algorithm of astropy's `sigma_clipped_stats` with
//!   `sigma=3, maxiters=10, cenfunc='median', stdfunc='mad_std'`, which the tests compare
//!   against. It measures the noise where the map has emission-free area; on a map filled
//!   with emission it measures the emission's own spread.
//! * **Difference estimate.** The DER_SNR estimator (Stoehr et al. 2008, ASP Conf. Ser. 394,
//!   505) applied along the rows: 1.482602/sqrt(6) * median(|2 x_i - x_{i-2} - x_{i+2}|).
//!   Insensitive to smooth emission, but low when the noise is correlated over several pixels
//!   (for example smoothed by the beam). When the two disagree by much, give `--noise`.
//!
//! * **Residual estimate (what `inspect` and `segment` use by default).** The clipped
//!   estimate applied to the map minus a smooth background: medians in square boxes of
//!   `box_px` pixels (five beams by default), interpolated bilinearly between box centres
//!   (a common practice for removing extended emission before measuring noise). Structure
//!   larger than the boxes no longer inflates the estimate, while noise correlated over a beam
//!   is kept, which the difference estimate misses.
//!
//! Maps larger than 2^21 finite pixels are estimated from a regular subsample of that many
//! pixels (every k-th finite pixel in storage order), so the result stays deterministic.

use ndarray::ArrayView2;
use rayon::prelude::*;

/// Scale from the median absolute deviation to the standard deviation of a Gaussian,
/// 1 / Phi^-1(3/4), as used by astropy's `mad_std`.
pub const MAD_TO_SIGMA: f64 = 1.482602218505602;

/// At most this many pixels are used for an estimate.
pub const MAX_SAMPLE: usize = 1 << 21;

/// The result of the clipped estimate.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ClippedStats {
    /// Mean of the kept pixels.
    pub mean: f64,
    /// Median of the kept pixels.
    pub median: f64,
    /// Standard deviation (ddof 0) of the kept pixels: the noise.
    pub std: f64,
    /// Pixels used before clipping.
    pub n_used: usize,
    /// Pixels kept after clipping.
    pub n_kept: usize,
    /// Clipping passes made.
    pub passes: usize,
}

/// Why no estimate could be made.
#[derive(Debug, Clone, PartialEq)]
pub enum NoNoise {
    /// Every pixel is missing.
    AllMissing,
    /// Every finite pixel has the same value.
    Constant(f64),
    /// At least half the pixels share one value (a quantised or mostly empty map), so the
    /// median absolute deviation, and the clipped width with it, is zero.
    Quantised(f64),
}

impl std::fmt::Display for NoNoise {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            NoNoise::AllMissing => write!(
                f,
                "every pixel is missing (NaN, BLANK or infinite), so there is nothing to measure"
            ),
            NoNoise::Constant(v) => write!(
                f,
                "every pixel has the same value ({:?}), so the map has no noise to measure",
                *v as f32
            ),
            NoNoise::Quantised(v) => write!(
                f,
                "at least half of the pixels the clipping keeps have the same value ({:?}) (a quantised map, or a large area of one value such as a zero-filled border), so the clipped noise estimate cannot be made; if that value marks unobserved pixels, give --missing-value {}",
                *v as f32, *v as f32
            ),
        }
    }
}

/// The finite pixels of a map, subsampled to at most [`MAX_SAMPLE`], as f64.
pub fn finite_sample(map: ArrayView2<f32>) -> Vec<f64> {
    let n_finite = map.iter().filter(|v| v.is_finite()).count();
    let stride = n_finite.div_ceil(MAX_SAMPLE).max(1);
    map.iter()
        .filter(|v| v.is_finite())
        .step_by(stride)
        .map(|&v| v as f64)
        .collect()
}

/// Median of a slice (reorders it). The mean of the two middle values for even lengths.
pub fn median_in_place(v: &mut [f64]) -> f64 {
    let n = v.len();
    assert!(n > 0, "median of an empty set");
    let (_, &mut hi, _) = v.select_nth_unstable_by(n / 2, f64::total_cmp);
    if n % 2 == 1 {
        hi
    } else {
        let lo = v[..n / 2].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        0.5 * (lo + hi)
    }
}

/// Scaled median absolute deviation about the median.
pub fn mad_std(v: &[f64]) -> f64 {
    let mut w = v.to_vec();
    let m = median_in_place(&mut w);
    for x in w.iter_mut() {
        *x = (*x - m).abs();
    }
    MAD_TO_SIGMA * median_in_place(&mut w)
}

/// Iterative 3-sigma clipping about the median with the MAD width (see the module doc).
///
/// The values are sorted once; every pass's kept set is then a run of the sorted values (each
/// pass keeps an interval of values), whose median is read directly and whose median absolute
/// deviation is found by bisection (the deviations of the values below the median and of those
/// above it are two sorted sequences). The mean and standard deviation are summed over the kept
/// values in their given order, so the result is that of clipping the values themselves pass by
/// pass, to the last bit (a unit test compares the two). The values must be finite (as every
/// sample of this module is).
pub fn clipped_stats_of(
    values: Vec<f64>,
    sigma: f64,
    max_passes: usize,
) -> Result<ClippedStats, NoNoise> {
    debug_assert!(values.iter().all(|v| v.is_finite()), "finite values only");
    if values.is_empty() {
        return Err(NoNoise::AllMissing);
    }
    let all_same = values.iter().all(|&x| x == values[0]);
    let n_used = values.len();
    let mut sorted = values.clone();
    sorted.par_sort_unstable_by(f64::total_cmp);
    // The kept values are sorted[a..b].
    let (mut a, mut b) = (0, sorted.len());
    let mut passes = 0;
    while passes < max_passes && a < b {
        passes += 1;
        let run = &sorted[a..b];
        let cen = median_of_sorted(run);
        let width = MAD_TO_SIGMA * median_deviation_of_sorted(run, cen);
        let (lo, hi) = (cen - width * sigma, cen + width * sigma);
        let a2 = a + run.partition_point(|&x| x < lo);
        let b2 = a + run.partition_point(|&x| x <= hi);
        if a2 == a && b2 == b {
            break;
        }
        (a, b) = (a2, b2.max(a2));
    }
    let (median, lo, hi) = if a < b {
        (median_of_sorted(&sorted[a..b]), sorted[a], sorted[b - 1])
    } else {
        (f64::NAN, f64::INFINITY, f64::NEG_INFINITY)
    };
    drop(sorted);
    // The kept values in their given order, without a copy.
    let kept = || values.iter().filter(move |&&x| x >= lo && x <= hi);
    let n_kept = b - a;
    let n = n_kept as f64;
    let mean = kept().sum::<f64>() / n;
    let var = kept().map(|x| (x - mean) * (x - mean)).sum::<f64>() / n;
    let std = var.sqrt();
    if std == 0.0 {
        return Err(if all_same {
            NoNoise::Constant(median)
        } else {
            NoNoise::Quantised(median)
        });
    }
    Ok(ClippedStats {
        mean,
        median,
        std,
        n_used,
        n_kept,
        passes,
    })
}

/// The median of values sorted in ascending order (as [`median_in_place`] gives it).
fn median_of_sorted(s: &[f64]) -> f64 {
    let n = s.len();
    if n % 2 == 1 {
        s[n / 2]
    } else {
        0.5 * (s[n / 2 - 1] + s[n / 2])
    }
}

/// The median of `|x - cen|` over values sorted in ascending order (as [`median_in_place`] of
/// the deviations gives it). The deviations of the values below `cen` grow towards the start
/// and those of the others towards the end (rounding keeps each side monotone), so the
/// deviations are two sorted sequences, and their middle order statistics are found by
/// bisection.
fn median_deviation_of_sorted(s: &[f64], cen: f64) -> f64 {
    let n = s.len();
    let split = s.partition_point(|&x| x < cen);
    // The i-th smallest deviation below the centre, and above it.
    let below = |i: usize| (s[split - 1 - i] - cen).abs();
    let above = |i: usize| (s[split + i] - cen).abs();
    let (nb, na) = (split, n - split);
    // The k-th smallest (from 0) of the two sequences together: the smallest count i taken
    // from below such that below(i) is not less than the last one taken from above.
    let kth = |k: usize| -> f64 {
        let take = k + 1;
        let (mut lo, mut hi) = (take.saturating_sub(na), take.min(nb));
        while lo < hi {
            let i = (lo + hi) / 2;
            if below(i) < above(take - i - 1) {
                lo = i + 1;
            } else {
                hi = i;
            }
        }
        let (i, j) = (lo, take - lo);
        let b = if i > 0 {
            below(i - 1)
        } else {
            f64::NEG_INFINITY
        };
        let a = if j > 0 {
            above(j - 1)
        } else {
            f64::NEG_INFINITY
        };
        b.max(a)
    };
    let mid = kth(n / 2);
    if n % 2 == 1 {
        mid
    } else {
        0.5 * (kth(n / 2 - 1) + mid)
    }
}

/// The default noise estimate of a map (3-sigma clipping, at most 10 passes).
pub fn clipped_stats(map: ArrayView2<f32>) -> Result<ClippedStats, NoNoise> {
    clipped_stats_of(finite_sample(map), 3.0, 10)
}

/// A smooth background of box medians (see the module doc). Boxes with less than a quarter
/// of their pixels finite take the median of the whole map.
pub struct BoxBackground {
    grid: Vec<f64>,
    gx: usize,
    cx: Vec<f64>,
    cy: Vec<f64>,
}

impl BoxBackground {
    /// Medians of `map` in boxes of `box_px` pixels (at least 4), the rows of boxes in
    /// parallel (each box's median is its own, so the result does not depend on threads).
    pub fn new(map: ArrayView2<f32>, box_px: usize) -> Self {
        let (ny, nx) = map.dim();
        // A box larger than the map is the whole map (a beam given far wider than the map).
        let b = box_px.max(4).min(ny.max(nx).max(4));
        let (gy, gx) = (ny.div_ceil(b), nx.div_ceil(b));
        let global = {
            let mut all = finite_sample(map);
            if all.is_empty() {
                0.0
            } else {
                median_in_place(&mut all)
            }
        };
        let rows: Vec<Vec<Option<f64>>> = (0..gy)
            .into_par_iter()
            .map(|j| {
                let mut buf = Vec::with_capacity(b.min(ny) * b.min(nx));
                (0..gx)
                    .map(|i| {
                        buf.clear();
                        let (y1, x1) = (((j + 1) * b).min(ny), ((i + 1) * b).min(nx));
                        for y in j * b..y1 {
                            let row = map.row(y);
                            for x in i * b..x1 {
                                let v = row[x];
                                if v.is_finite() {
                                    buf.push(v as f64);
                                }
                            }
                        }
                        let size = (y1 - j * b) * (x1 - i * b);
                        (!buf.is_empty() && buf.len() * 4 >= size)
                            .then(|| median_in_place(&mut buf))
                    })
                    .collect()
            })
            .collect();
        let grid = rows
            .into_iter()
            .flatten()
            .map(|m| m.unwrap_or(global))
            .collect();
        let centre =
            |k: usize, n: usize| (k * b) as f64 + (((k + 1) * b).min(n) - k * b) as f64 / 2.0 - 0.5;
        BoxBackground {
            grid,
            gx,
            cx: (0..gx).map(|i| centre(i, nx)).collect(),
            cy: (0..gy).map(|j| centre(j, ny)).collect(),
        }
    }

    fn locate(c: &[f64], v: f64) -> (usize, usize, f64) {
        if c.len() == 1 || v <= c[0] {
            return (0, 0, 0.0);
        }
        if v >= c[c.len() - 1] {
            let l = c.len() - 1;
            return (l, l, 0.0);
        }
        let k = c.partition_point(|&q| q <= v) - 1;
        (k, k + 1, (v - c[k]) / (c[k + 1] - c[k]))
    }

    /// The background at pixel (y, x): bilinear between box centres, constant beyond them.
    pub fn at(&self, y: usize, x: usize) -> f64 {
        self.at_located(
            Self::locate(&self.cy, y as f64),
            Self::locate(&self.cx, x as f64),
        )
    }

    /// [`Self::at`] with the row's and the column's places among the box centres found.
    fn at_located(
        &self,
        (j0, j1, ty): (usize, usize, f64),
        (i0, i1, tx): (usize, usize, f64),
    ) -> f64 {
        let g = |j: usize, i: usize| self.grid[j * self.gx + i];
        let top = g(j0, i0) * (1.0 - tx) + g(j0, i1) * tx;
        let bot = g(j1, i0) * (1.0 - tx) + g(j1, i1) * tx;
        top * (1.0 - ty) + bot * ty
    }
}

/// The residual estimate (see the module doc): clipped statistics of the map minus its box
/// background, over the same regular subsample as [`finite_sample`].
pub fn residual_stats(map: ArrayView2<f32>, box_px: usize) -> Result<ClippedStats, NoNoise> {
    let bg = BoxBackground::new(map, box_px);
    let (ny, nx) = map.dim();
    // Every row's and column's place among the box centres, found once.
    let rows: Vec<_> = (0..ny)
        .map(|y| BoxBackground::locate(&bg.cy, y as f64))
        .collect();
    let cols: Vec<_> = (0..nx)
        .map(|x| BoxBackground::locate(&bg.cx, x as f64))
        .collect();
    let n_finite = map.iter().filter(|v| v.is_finite()).count();
    let stride = n_finite.div_ceil(MAX_SAMPLE).max(1);
    let sample: Vec<f64> = map
        .indexed_iter()
        .filter(|(_, v)| v.is_finite())
        .step_by(stride)
        .map(|((y, x), &v)| v as f64 - bg.at_located(rows[y], cols[x]))
        .collect();
    match clipped_stats_of(sample, 3.0, 10) {
        Err(NoNoise::Constant(_)) => Err(clipped_stats(map)
            .err()
            .unwrap_or(NoNoise::Constant(f64::NAN))),
        other => other,
    }
}

/// The DER_SNR difference estimate along rows (see the module doc).
pub fn difference_sigma(map: ArrayView2<f32>) -> Result<f64, NoNoise> {
    difference_sigma_sampled(map, MAX_SAMPLE)
}

/// [`difference_sigma`] from whole rows at a regular step, about `max_sample` differences at
/// most: for checks that need the noise's order of magnitude only (a given noise a hundred
/// times off), at a small part of the cost on a large map.
pub fn difference_sigma_sampled(map: ArrayView2<f32>, max_sample: usize) -> Result<f64, NoNoise> {
    let mut d = Vec::new();
    let n_rows = map.nrows();
    let row_stride = (map.len().div_ceil(max_sample.max(1))).max(1);
    for row in map
        .rows()
        .into_iter()
        .step_by(row_stride.min(n_rows.max(1)))
    {
        let r: Vec<f32> = row.iter().copied().collect();
        for i in 2..r.len().saturating_sub(2) {
            let (a, b, c) = (r[i - 2], r[i], r[i + 2]);
            if a.is_finite() && b.is_finite() && c.is_finite() {
                d.push((2.0 * b as f64 - a as f64 - c as f64).abs());
            }
        }
    }
    if d.is_empty() {
        return Err(NoNoise::AllMissing);
    }
    let s = MAD_TO_SIGMA / 6f64.sqrt() * median_in_place(&mut d);
    if s == 0.0 {
        let v = map
            .iter()
            .find(|v| v.is_finite())
            .copied()
            .unwrap_or(f32::NAN);
        return Err(NoNoise::Constant(v as f64));
    }
    Ok(s)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    fn gaussian_map(n: usize, sigma: f64, seed: u64) -> Array2<f32> {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let d = Normal::new(0.0, sigma).unwrap();
        Array2::from_shape_fn((n, n), |_| d.sample(&mut rng) as f32)
    }

    /// Clipping as the module doc words it: the kept values themselves, pass by pass.
    fn clipped_stats_plain(
        values: Vec<f64>,
        sigma: f64,
        max_passes: usize,
    ) -> Result<ClippedStats, NoNoise> {
        if values.is_empty() {
            return Err(NoNoise::AllMissing);
        }
        let all_same = values.iter().all(|&x| x == values[0]);
        let mut kept = values;
        let n_used = kept.len();
        let mut passes = 0;
        let mut scratch = Vec::with_capacity(kept.len());
        while passes < max_passes {
            passes += 1;
            scratch.clear();
            scratch.extend_from_slice(&kept);
            let cen = median_in_place(&mut scratch);
            for x in scratch.iter_mut() {
                *x = (*x - cen).abs();
            }
            let width = MAD_TO_SIGMA * median_in_place(&mut scratch);
            let (lo, hi) = (cen - width * sigma, cen + width * sigma);
            let before = kept.len();
            kept.retain(|&x| x >= lo && x <= hi);
            if kept.len() == before {
                break;
            }
        }
        let n = kept.len() as f64;
        let mean = kept.iter().sum::<f64>() / n;
        let var = kept.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / n;
        let std = var.sqrt();
        scratch.clear();
        scratch.extend_from_slice(&kept);
        let median = median_in_place(&mut scratch);
        if std == 0.0 {
            return Err(if all_same {
                NoNoise::Constant(median)
            } else {
                NoNoise::Quantised(median)
            });
        }
        Ok(ClippedStats {
            mean,
            median,
            std,
            n_used,
            n_kept: kept.len(),
            passes,
        })
    }

    /// The background as the module doc words it: each box's median in turn, each pixel's
    /// place among the box centres looked up.
    fn residual_sample_plain(map: ArrayView2<f32>, box_px: usize) -> Vec<f64> {
        let (ny, nx) = map.dim();
        let b = box_px.max(4).min(ny.max(nx).max(4));
        let (gy, gx) = (ny.div_ceil(b), nx.div_ceil(b));
        let mut all = finite_sample(map);
        let global = if all.is_empty() {
            0.0
        } else {
            median_in_place(&mut all)
        };
        let mut grid = vec![global; gx * gy];
        for j in 0..gy {
            for i in 0..gx {
                let mut buf = Vec::new();
                let (y1, x1) = (((j + 1) * b).min(ny), ((i + 1) * b).min(nx));
                for y in j * b..y1 {
                    for x in i * b..x1 {
                        if map[(y, x)].is_finite() {
                            buf.push(map[(y, x)] as f64);
                        }
                    }
                }
                if !buf.is_empty() && buf.len() * 4 >= (y1 - j * b) * (x1 - i * b) {
                    grid[j * gx + i] = median_in_place(&mut buf);
                }
            }
        }
        let centre =
            |k: usize, n: usize| (k * b) as f64 + (((k + 1) * b).min(n) - k * b) as f64 / 2.0 - 0.5;
        let bg = BoxBackground {
            grid,
            gx,
            cx: (0..gx).map(|i| centre(i, nx)).collect(),
            cy: (0..gy).map(|j| centre(j, ny)).collect(),
        };
        let n_finite = map.iter().filter(|v| v.is_finite()).count();
        let stride = n_finite.div_ceil(MAX_SAMPLE).max(1);
        map.indexed_iter()
            .filter(|(_, v)| v.is_finite())
            .step_by(stride)
            .map(|((y, x), &v)| v as f64 - bg.at(y, x))
            .collect()
    }

    #[test]
    fn sorted_clipping_is_plain_clipping_to_the_bit() {
        // Noise with outliers, quantised values (ties, zeros of both signs), a skewed tail and
        // a few values only: the sorted form against clipping the values pass by pass (at
        // widths of at least one sigma, which always keep the middle half).
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let normal = Normal::new(0.0, 1.0).unwrap();
        let mut sets: Vec<Vec<f64>> = Vec::new();
        for n in [1usize, 2, 3, 4, 5, 10, 101, 1000, 20000] {
            sets.push((0..n).map(|_| normal.sample(&mut rng)).collect());
            sets.push(
                (0..n)
                    .map(|i| {
                        let v: f64 = normal.sample(&mut rng);
                        if i % 17 == 0 { v * 50.0 + 20.0 } else { v }
                    })
                    .collect(),
            );
            sets.push(
                (0..n)
                    .map(|_| (normal.sample(&mut rng) * 3.0).round())
                    .collect(),
            );
            sets.push(
                (0..n)
                    .map(|i| {
                        if i % 2 == 0 {
                            0.0
                        } else if i % 3 == 0 {
                            -0.0
                        } else {
                            1.0
                        }
                    })
                    .collect(),
            );
            sets.push(
                (0..n)
                    .map(|_| normal.sample(&mut rng).exp().powi(3))
                    .collect(),
            );
        }
        sets.push(vec![4.0; 9]);
        for (k, v) in sets.into_iter().enumerate() {
            for (sigma, passes) in [(3.0, 10), (1.0, 10), (2.0, 1), (1.5, 50)] {
                let fast = clipped_stats_of(v.clone(), sigma, passes);
                let plain = clipped_stats_plain(v.clone(), sigma, passes);
                let same = match (&fast, &plain) {
                    (Ok(f), Ok(p)) => {
                        f.mean.to_bits() == p.mean.to_bits()
                            && f.median.to_bits() == p.median.to_bits()
                            && f.std.to_bits() == p.std.to_bits()
                            && (f.n_used, f.n_kept, f.passes) == (p.n_used, p.n_kept, p.passes)
                    }
                    (Err(f), Err(p)) => format!("{f:?}") == format!("{p:?}"),
                    _ => false,
                };
                assert!(same, "set {k}, sigma {sigma}: {fast:?} against {plain:?}");
            }
        }
    }

    #[test]
    fn parallel_box_background_is_the_plain_one_to_the_bit() {
        // Noise on a slope with missing pixels and a missing corner, boxes not dividing the map.
        let mut m = gaussian_map(203, 1.0, 9);
        for ((y, x), v) in m.indexed_iter_mut() {
            *v += 0.05 * x as f32 - 0.02 * y as f32;
            if (x * 7 + y * 3) % 11 == 0 || (x < 60 && y < 60) {
                *v = f32::NAN;
            }
        }
        for box_px in [4, 17, 50, 500] {
            let bg = BoxBackground::new(m.view(), box_px);
            let (ny, nx) = m.dim();
            let rows: Vec<_> = (0..ny)
                .map(|y| BoxBackground::locate(&bg.cy, y as f64))
                .collect();
            let cols: Vec<_> = (0..nx)
                .map(|x| BoxBackground::locate(&bg.cx, x as f64))
                .collect();
            let fast: Vec<u64> = m
                .indexed_iter()
                .filter(|(_, v)| v.is_finite())
                .map(|((y, x), &v)| (v as f64 - bg.at_located(rows[y], cols[x])).to_bits())
                .collect();
            let plain: Vec<u64> = residual_sample_plain(m.view(), box_px)
                .into_iter()
                .map(f64::to_bits)
                .collect();
            assert_eq!(fast, plain, "boxes of {box_px} px");
        }
    }

    #[test]
    fn both_estimates_recover_white_noise() {
        // Gaussian white noise of known sigma: a statistical check (common practice), the
        // standard error of a 512x512 sample's sigma is about 0.2%.
        let m = gaussian_map(512, 2.5, 7);
        let c = clipped_stats(m.view()).unwrap();
        assert!((c.std / 2.5 - 1.0).abs() < 0.02, "{c:?}");
        let d = difference_sigma(m.view()).unwrap();
        assert!((d / 2.5 - 1.0).abs() < 0.02, "{d}");
    }

    #[test]
    fn residual_estimate_ignores_extended_emission_but_keeps_the_noise() {
        // White noise of sigma 1 on a broad Gaussian hill 40 sigma high.
        let mut m = gaussian_map(256, 1.0, 11);
        for ((y, x), v) in m.indexed_iter_mut() {
            let r2 = (x as f32 - 128.0).powi(2) + (y as f32 - 128.0).powi(2);
            *v += 40.0 * (-r2 / (2.0 * 60.0 * 60.0)).exp();
        }
        let plain = clipped_stats(m.view()).unwrap().std;
        let resid = residual_stats(m.view(), 16).unwrap().std;
        assert!(
            plain > 5.0,
            "the hill dominates the plain estimate: {plain}"
        );
        assert!((resid - 1.0).abs() < 0.05, "{resid}");
    }

    #[test]
    fn difference_estimate_ignores_a_smooth_gradient() {
        let mut m = gaussian_map(256, 1.0, 3);
        for ((y, x), v) in m.indexed_iter_mut() {
            *v += (x as f32) * 0.5 + (y as f32) * 0.25;
        }
        let d = difference_sigma(m.view()).unwrap();
        assert!((d - 1.0).abs() < 0.05, "{d}");
    }

    #[test]
    fn constant_and_empty_maps_say_why() {
        let m = Array2::from_elem((8, 8), 4.0f32);
        assert_eq!(clipped_stats(m.view()).unwrap_err(), NoNoise::Constant(4.0));
        let m = Array2::from_elem((8, 8), f32::NAN);
        assert_eq!(clipped_stats(m.view()).unwrap_err(), NoNoise::AllMissing);
        assert!(NoNoise::AllMissing.to_string().contains("missing"));
        // Mostly one value, a few others: not constant, but no clipped width either.
        let m = Array2::from_shape_fn((8, 8), |(y, x)| if y == 0 { x as f32 } else { 0.0 });
        assert_eq!(
            clipped_stats(m.view()).unwrap_err(),
            NoNoise::Quantised(0.0)
        );
    }

    #[test]
    fn median_of_even_and_odd_sets() {
        assert_eq!(median_in_place(&mut [3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median_in_place(&mut [4.0, 1.0, 3.0, 2.0]), 2.5);
    }
}

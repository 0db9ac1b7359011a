//! Moment sums of a structure's pixels, gathered from the label map after the sweep.

use super::{Connectivity, Structure};
use rayon::prelude::*;

/// Sums over a set of pixels with values `v` at column `x` and row `y` (pixel centres at
/// integer coordinates, 0-based), taken about a reference point `(x0, y0)`: with
/// `dx = x - x0` and `dy = y - y0`. A structure's sums are taken about its peak pixel, so
/// that the second moments of a small structure far from the map's origin keep their
/// precision (about the origin they would be the difference of two numbers of order x^2).
/// Weighted sums use the value as weight. [`Moments::default`] is taken about the origin.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Moments {
    /// Column of the reference point.
    pub x0: f64,
    /// Row of the reference point.
    pub y0: f64,
    /// Number of pixels.
    pub n: u64,
    /// Sum of v.
    pub sum: f64,
    /// Sum of v^2.
    pub sum2: f64,
    /// Sum of v dx.
    pub sx: f64,
    /// Sum of v dy.
    pub sy: f64,
    /// Sum of v dx^2.
    pub sxx: f64,
    /// Sum of v dy^2.
    pub syy: f64,
    /// Sum of v dx dy.
    pub sxy: f64,
    /// Sum of dx.
    pub ux: f64,
    /// Sum of dy.
    pub uy: f64,
    /// Sum of dx^2.
    pub uxx: f64,
    /// Sum of dy^2.
    pub uyy: f64,
    /// Sum of dx dy.
    pub uxy: f64,
}

impl Moments {
    /// Empty sums about `(x0, y0)`.
    pub fn about(x0: f64, y0: f64) -> Moments {
        Moments {
            x0,
            y0,
            ..Default::default()
        }
    }

    /// Adds one pixel.
    #[inline]
    pub fn add(&mut self, x: f64, y: f64, v: f64) {
        let (x, y) = (x - self.x0, y - self.y0);
        self.n += 1;
        self.sum += v;
        self.sum2 += v * v;
        self.sx += v * x;
        self.sy += v * y;
        self.sxx += v * x * x;
        self.syy += v * y * y;
        self.sxy += v * x * y;
        self.ux += x;
        self.uy += y;
        self.uxx += x * x;
        self.uyy += y * y;
        self.uxy += x * y;
    }

    /// Adds the sums of another set of pixels, moved to this reference point first.
    pub fn merge(&mut self, o: &Moments) {
        let o = o.moved_to(self.x0, self.y0);
        self.n += o.n;
        for (t, f) in self.sums_mut().into_iter().zip(o.sums()) {
            *t += f;
        }
    }

    /// The same sums taken about `(x0, y0)` (the parallel-axis relations); unchanged when
    /// that is already the reference point.
    pub fn moved_to(&self, x0: f64, y0: f64) -> Moments {
        let (a, b) = (self.x0 - x0, self.y0 - y0);
        if a == 0.0 && b == 0.0 {
            return *self;
        }
        let n = self.n as f64;
        Moments {
            x0,
            y0,
            n: self.n,
            sum: self.sum,
            sum2: self.sum2,
            sx: self.sx + a * self.sum,
            sy: self.sy + b * self.sum,
            sxx: self.sxx + 2.0 * a * self.sx + a * a * self.sum,
            syy: self.syy + 2.0 * b * self.sy + b * b * self.sum,
            sxy: self.sxy + a * self.sy + b * self.sx + a * b * self.sum,
            ux: self.ux + a * n,
            uy: self.uy + b * n,
            uxx: self.uxx + 2.0 * a * self.ux + a * a * n,
            uyy: self.uyy + 2.0 * b * self.uy + b * b * n,
            uxy: self.uxy + a * self.uy + b * self.ux + a * b * n,
        }
    }

    /// The twelve sums, in field order.
    fn sums(&self) -> [f64; 12] {
        [
            self.sum, self.sum2, self.sx, self.sy, self.sxx, self.syy, self.sxy, self.ux, self.uy,
            self.uxx, self.uyy, self.uxy,
        ]
    }

    /// The twelve sums, in field order, to change.
    fn sums_mut(&mut self) -> [&mut f64; 12] {
        [
            &mut self.sum,
            &mut self.sum2,
            &mut self.sx,
            &mut self.sy,
            &mut self.sxx,
            &mut self.syy,
            &mut self.sxy,
            &mut self.ux,
            &mut self.uy,
            &mut self.uxx,
            &mut self.uyy,
            &mut self.uxy,
        ]
    }

    /// Unweighted centroid (x, y).
    pub fn centroid(&self) -> (f64, f64) {
        let n = self.n as f64;
        (self.x0 + self.ux / n, self.y0 + self.uy / n)
    }

    /// Value-weighted centroid (x, y).
    pub fn weighted_centroid(&self) -> (f64, f64) {
        (self.x0 + self.sx / self.sum, self.y0 + self.sy / self.sum)
    }

    /// Unweighted covariance of the pixel positions: (xx, xy, yy).
    pub fn covariance(&self) -> (f64, f64, f64) {
        let s = self;
        central(s.n as f64, [s.ux, s.uy], [s.uxx, s.uxy, s.uyy])
    }

    /// Value-weighted covariance of the pixel positions: (xx, xy, yy).
    pub fn weighted_covariance(&self) -> (f64, f64, f64) {
        let s = self;
        central(s.sum, [s.sx, s.sy], [s.sxx, s.sxy, s.syy])
    }
}

/// The covariance (xx, xy, yy) from the total weight `w`, the first sums (x, y) and the second
/// sums (xx, xy, yy), all about the same point.
fn central(w: f64, first: [f64; 2], second: [f64; 3]) -> (f64, f64, f64) {
    let (mx, my) = (first[0] / w, first[1] / w);
    (
        second[0] / w - mx * mx,
        second[1] / w - mx * my,
        second[2] / w - my * my,
    )
}

/// What one structure gathers from its own pixels, about its peak.
#[derive(Clone, Copy)]
struct Own {
    m: Moments,
    min: f32,
    edge: bool,
    missing: bool,
}

impl Own {
    /// Nothing yet, about the peak `(px, py)`.
    fn about(px: usize, py: usize) -> Own {
        Own {
            m: Moments::about(px as f64, py as f64),
            min: f32::INFINITY,
            edge: false,
            missing: false,
        }
    }

    /// Adds another set's sums: taken about the same point (a block's) or about a child's
    /// peak.
    fn add(&mut self, o: &Own) {
        self.m.merge(&o.m);
        self.min = self.min.min(o.min);
        self.edge |= o.edge;
        self.missing |= o.missing;
    }
}

/// The sums of d and of d^2 over the `n` integers from `d0` on: `n d0 + T1` and
/// `n d0^2 + 2 d0 T1 + T2`, with `T1` and `T2` the sums of j and j^2 for j below `n`, in
/// integers (divisions by constants, cheap); exact while they stay below 2^53.
#[inline]
fn run_sums(d0: f64, n: usize) -> (f64, f64) {
    let (t1, t2) = if n < 1 << 20 {
        let k = n as u64;
        let t1 = k * k.saturating_sub(1) / 2;
        let t2 = k.saturating_sub(1) * k * (2 * k).saturating_sub(1) / 6;
        (t1 as f64, t2 as f64)
    } else {
        let k = n as u128;
        let t1 = k * k.saturating_sub(1) / 2;
        let t2 = k.saturating_sub(1) * k * (2 * k).saturating_sub(1) / 6;
        (t1 as f64, t2 as f64)
    };
    let nf = n as f64;
    (nf * d0 + t1, nf * d0 * d0 + 2.0 * d0 * t1 + t2)
}

/// Fills `npix`, `npix_own`, `sums`, `min_value`, `touches_edge` and `touches_missing` of
/// every structure from the final labels. `bottom_up` lists the ids so that every child comes
/// before its parent; `any_missing` says whether the map has missing (NaN) pixels at all.
///
/// Rows are cut into blocks whose number depends only on the map size and the number of
/// structures (never on the thread count), each block is summed on its own and the blocks are
/// added in row order, so the floating-point sums are identical for any thread count. A block
/// keeps sums only for the structures it meets (most meet few), in the order it meets them;
/// adding a block's sums for a structure it never met would add exact zeros, so leaving them
/// out changes no bit (a sum that starts at +0.0 never becomes -0.0).
pub(super) fn fill(
    map: &[f32],
    ncols: usize,
    labels: &[i32],
    conn: Connectivity,
    any_missing: bool,
    structures: &mut [Structure],
    bottom_up: &[u32],
) {
    let ns = structures.len();
    if ns == 0 {
        return;
    }
    let nrows = labels.len() / ncols;
    let npix = labels.len();
    let nblocks = (npix / (ns * 64)).clamp(1, 32).min(nrows.max(1));
    let rows_per = nrows.div_ceil(nblocks);
    let offs = conn.offsets();
    let peaks: Vec<(usize, usize)> = structures.iter().map(|s| (s.peak_x, s.peak_y)).collect();
    let blocks: Vec<Vec<(u32, Own)>> = (0..nblocks)
        .into_par_iter()
        .map(|b| {
            // Where each structure met in this block keeps its sums in `acc` (NOT_MET if not).
            const NOT_MET: u32 = u32::MAX;
            let mut slot = vec![NOT_MET; ns];
            let mut acc: Vec<(u32, Own)> = Vec::new();
            let r0 = b * rows_per;
            let r1 = ((b + 1) * rows_per).min(nrows);
            for y in r0..r1 {
                let row = &labels[y * ncols..(y + 1) * ncols];
                let vals = &map[y * ncols..(y + 1) * ncols];
                let edge_row = y == 0 || y + 1 == nrows;
                let mut x = 0;
                while x < ncols {
                    let l = row[x];
                    if l < 0 {
                        x += 1;
                        continue;
                    }
                    // A run of pixels of one structure is summed in registers.
                    let k = &mut slot[l as usize];
                    if *k == NOT_MET {
                        *k = acc.len() as u32;
                        let (px, py) = peaks[l as usize];
                        acc.push((l as u32, Own::about(px, py)));
                    }
                    let a = &mut acc[*k as usize].1;
                    let mut min = a.min;
                    let start = x;
                    let (pxf, dyf) = (a.m.x0, y as f64 - a.m.y0);
                    // Sums along the run, about the peak: the value's, its square's and its
                    // first and second moments in dx; those with the row's dy follow from
                    // them, and the unweighted ones from the run's ends.
                    let (mut s, mut s2, mut sx, mut sxx) = (0.0f64, 0.0f64, 0.0f64, 0.0f64);
                    while x < ncols && row[x] == l {
                        let v = vals[x];
                        let (vf, dxf) = (v as f64, x as f64 - pxf);
                        let vx = vf * dxf;
                        s += vf;
                        s2 += vf * vf;
                        sx += vx;
                        sxx += vx * dxf;
                        if v < min {
                            min = v;
                        }
                        x += 1;
                    }
                    let n = (x - start) as u64;
                    let nf = n as f64;
                    let (ux, uxx) = run_sums(start as f64 - pxf, x - start);
                    let m = &mut a.m;
                    m.n += n;
                    m.sum += s;
                    m.sum2 += s2;
                    m.sx += sx;
                    m.sy += dyf * s;
                    m.sxx += sxx;
                    m.syy += dyf * dyf * s;
                    m.sxy += dyf * sx;
                    m.ux += ux;
                    m.uy += nf * dyf;
                    m.uxx += uxx;
                    m.uyy += nf * dyf * dyf;
                    m.uxy += ux * dyf;
                    a.min = min;
                    if edge_row || start == 0 || x == ncols {
                        a.edge = true;
                    }
                    if any_missing && !a.missing {
                        'run: for xr in start..x {
                            for &(dy, dx) in offs {
                                let yy = y as isize + dy;
                                let xx = xr as isize + dx;
                                if yy >= 0
                                    && xx >= 0
                                    && (yy as usize) < nrows
                                    && (xx as usize) < ncols
                                    && map[yy as usize * ncols + xx as usize].is_nan()
                                {
                                    a.missing = true;
                                    break 'run;
                                }
                            }
                        }
                    }
                }
            }
            acc
        })
        .collect();
    let mut total: Vec<Own> = peaks.iter().map(|&(px, py)| Own::about(px, py)).collect();
    for block in &blocks {
        for (id, o) in block {
            total[*id as usize].add(o);
        }
    }
    drop(blocks);
    for s in structures.iter_mut() {
        s.npix_own = total[s.id as usize].m.n;
    }
    for &id in bottom_up {
        let own = total[id as usize];
        let s = &mut structures[id as usize];
        s.sums = own.m;
        s.npix = own.m.n;
        s.min_value = own.min as f64;
        s.touches_edge = own.edge;
        s.touches_missing = own.missing;
        if let Some(p) = s.parent {
            total[p as usize].add(&own);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The run sums against the sums term by term, in exact integers.
    #[test]
    fn run_sums_equal_the_direct_sums() {
        let direct = |d0: i64, n: usize| {
            (0..n as i64).fold((0i128, 0i128), |(s, q), j| {
                let d = (d0 + j) as i128;
                (s + d, q + d * d)
            })
        };
        for d0 in -40..40 {
            for n in 0..50 {
                let (s, q) = direct(d0, n);
                assert_eq!(run_sums(d0 as f64, n), (s as f64, q as f64), "{d0} {n}");
            }
        }
        // Both sides of the switch to 128-bit arithmetic, far from the peak.
        for (d0, n) in [(-300_000i64, (1 << 20) - 1), (-1_000_000, (1 << 20) + 3)] {
            let (s, q) = direct(d0, n);
            let (gs, gq) = run_sums(d0 as f64, n);
            assert_eq!(gs, s as f64);
            assert!((gq - q as f64).abs() <= 1e-15 * q as f64, "{gq} vs {q}");
        }
    }
}

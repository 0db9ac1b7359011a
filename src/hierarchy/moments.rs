//! Moment sums of a structure's pixels, gathered from the label map after the sweep.

use super::{Connectivity, Structure};
use rayon::prelude::*;

/// Raw sums over a set of pixels with values `v` at column `x` and row `y` (pixel centres at
/// integer coordinates, 0-based). Weighted sums use the value as weight.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Moments {
    /// Number of pixels.
    pub n: u64,
    /// Sum of v.
    pub sum: f64,
    /// Sum of v^2.
    pub sum2: f64,
    /// Sum of v x.
    pub sx: f64,
    /// Sum of v y.
    pub sy: f64,
    /// Sum of v x^2.
    pub sxx: f64,
    /// Sum of v y^2.
    pub syy: f64,
    /// Sum of v x y.
    pub sxy: f64,
    /// Sum of x.
    pub ux: f64,
    /// Sum of y.
    pub uy: f64,
    /// Sum of x^2.
    pub uxx: f64,
    /// Sum of y^2.
    pub uyy: f64,
    /// Sum of x y.
    pub uxy: f64,
}

impl Moments {
    /// Adds one pixel.
    #[inline]
    pub fn add(&mut self, x: f64, y: f64, v: f64) {
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

    /// Adds the sums of another set of pixels.
    pub fn merge(&mut self, o: &Moments) {
        self.n += o.n;
        self.sum += o.sum;
        self.sum2 += o.sum2;
        self.sx += o.sx;
        self.sy += o.sy;
        self.sxx += o.sxx;
        self.syy += o.syy;
        self.sxy += o.sxy;
        self.ux += o.ux;
        self.uy += o.uy;
        self.uxx += o.uxx;
        self.uyy += o.uyy;
        self.uxy += o.uxy;
    }

    /// Unweighted centroid (x, y).
    pub fn centroid(&self) -> (f64, f64) {
        let n = self.n as f64;
        (self.ux / n, self.uy / n)
    }

    /// Value-weighted centroid (x, y).
    pub fn weighted_centroid(&self) -> (f64, f64) {
        (self.sx / self.sum, self.sy / self.sum)
    }
}

/// What one structure gathers from its own pixels.
#[derive(Clone, Copy)]
struct Own {
    /// The weighted sums and the count; the unweighted position sums are kept in `u`.
    m: Moments,
    /// Sums of x, y, x^2, y^2 and x y, exact in integers (converted once, at the end).
    u: [u128; 5],
    min: f32,
    edge: bool,
    missing: bool,
}

const EMPTY: Own = Own {
    m: Moments {
        n: 0,
        sum: 0.0,
        sum2: 0.0,
        sx: 0.0,
        sy: 0.0,
        sxx: 0.0,
        syy: 0.0,
        sxy: 0.0,
        ux: 0.0,
        uy: 0.0,
        uxx: 0.0,
        uyy: 0.0,
        uxy: 0.0,
    },
    u: [0; 5],
    min: f32::INFINITY,
    edge: false,
    missing: false,
};

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
                let yf = y as f64;
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
                        acc.push((l as u32, EMPTY));
                    }
                    let a = &mut acc[*k as usize].1;
                    let mut min = a.min;
                    let start = x;
                    // Sums along the run: the value's, its square's and its first and second
                    // moments in x; those involving the row's y follow from them, and the
                    // unweighted ones from the run's ends (exact integers).
                    let (mut s, mut s2, mut sx, mut sxx) = (0.0f64, 0.0f64, 0.0f64, 0.0f64);
                    while x < ncols && row[x] == l {
                        let v = vals[x];
                        let (vf, xf) = (v as f64, x as f64);
                        let vx = vf * xf;
                        s += vf;
                        s2 += vf * vf;
                        sx += vx;
                        sxx += vx * xf;
                        if v < min {
                            min = v;
                        }
                        x += 1;
                    }
                    let n = (x - start) as u64;
                    let (ix, ixx) = run_sums(start, x);
                    let yu = y as u128;
                    let m = &mut a.m;
                    m.n += n;
                    m.sum += s;
                    m.sum2 += s2;
                    m.sx += sx;
                    m.sy += yf * s;
                    m.sxx += sxx;
                    m.syy += yf * yf * s;
                    m.sxy += yf * sx;
                    let u = &mut a.u;
                    u[0] += ix;
                    u[1] += n as u128 * yu;
                    u[2] += ixx;
                    u[3] += n as u128 * yu * yu;
                    u[4] += ix * yu;
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
    let mut total = vec![EMPTY; ns];
    for block in &blocks {
        for (id, o) in block {
            let t = &mut total[*id as usize];
            t.m.merge(&o.m);
            add_exact(&mut t.u, &o.u);
            t.min = t.min.min(o.min);
            t.edge |= o.edge;
            t.missing |= o.missing;
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
        [s.sums.ux, s.sums.uy, s.sums.uxx, s.sums.uyy, s.sums.uxy] = own.u.map(|v| v as f64);
        s.npix = own.m.n;
        s.min_value = own.min as f64;
        s.touches_edge = own.edge;
        s.touches_missing = own.missing;
        if let Some(p) = s.parent {
            let t = &mut total[p as usize];
            t.m.merge(&own.m);
            add_exact(&mut t.u, &own.u);
            t.min = t.min.min(own.min);
            t.edge |= own.edge;
            t.missing |= own.missing;
        }
    }
}

/// Adds exact integer sums.
fn add_exact(to: &mut [u128; 5], from: &[u128; 5]) {
    for (t, f) in to.iter_mut().zip(from) {
        *t += f;
    }
}

/// The sums of x and of x^2 over the integers `a0..a1`, exactly (in 64-bit arithmetic,
/// whose divisions by constants are cheap, on rows of fewer than 2^21 columns).
fn run_sums(a0: usize, a1: usize) -> (u128, u128) {
    if a1 < 1 << 21 {
        // (k - 1) k (2k - 1) < 2^64 for k < 2^21.
        let s1 = |k: u64| k * k.saturating_sub(1) / 2;
        let s2 = |k: u64| k.saturating_sub(1) * k * (2 * k).saturating_sub(1) / 6;
        let (a0, a1) = (a0 as u64, a1 as u64);
        ((s1(a1) - s1(a0)) as u128, (s2(a1) - s2(a0)) as u128)
    } else {
        let s1 = |k: u128| k * k.saturating_sub(1) / 2;
        let s2 = |k: u128| k.saturating_sub(1) * k * (2 * k).saturating_sub(1) / 6;
        let (a0, a1) = (a0 as u128, a1 as u128);
        (s1(a1) - s1(a0), s2(a1) - s2(a0))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn run_sums_equal_the_direct_sums() {
        let direct = |a0: usize, a1: usize| {
            (a0..a1).fold((0u128, 0u128), |(s, q), x| {
                (s + x as u128, q + (x as u128) * (x as u128))
            })
        };
        for a0 in 0..40 {
            for a1 in a0..60 {
                assert_eq!(run_sums(a0, a1), direct(a0, a1), "{a0}..{a1}");
            }
        }
        // Both sides of the switch to 128-bit arithmetic.
        for (a0, a1) in [
            ((1 << 21) - 70, (1 << 21) - 1),
            ((1 << 21) - 3, (1 << 21) + 5),
            (5_000_000, 5_000_100),
        ] {
            assert_eq!(run_sums(a0, a1), direct(a0, a1), "{a0}..{a1}");
        }
    }
}

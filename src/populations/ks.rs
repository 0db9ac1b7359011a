//! Two-sample Kolmogorov-Smirnov test (two-sided), following `scipy.stats.ks_2samp` 1.17.
//!
//! Statistic: D = max |F1(v) - F2(v)| over all observed values v, with the right-continuous
//! empirical CDFs (ties handled by counting values <= v in each sample).
//!
//! p-value, by method:
//! - Exact: the null distribution of D for samples of sizes m, n (continuous data) by counting
//!   lattice paths (Hodges 1958, Arkiv for Matematik 3, 469). D is first snapped to the lattice
//!   h / lcm(m, n). For m = n the alternating binomial series is evaluated as a Horner-like
//!   product; otherwise the "inside" recursion is run so that it yields the p-value directly
//!   (Viehmann 2021, arXiv:2102.08037), with the same window and order of operations as scipy.
//!   If that recursion does not give a finite probability in [0, 1] the asymptotic p-value is
//!   used instead, as scipy does, and [`KsTwoSample::method`] says so.
//! - Asymptotic: the exact one-sample two-sided Kolmogorov distribution at the effective size
//!   n_e = round(m n / (m + n)) (numpy's round-half-even), evaluated as scipy's `kstwo.sf`
//!   (Simard & L'Ecuyer 2011, J. Stat. Softw. 39, 11): the Ruben-Gambino closed forms at the
//!   ends, twice the one-sided Smirnov probability (Birnbaum & Tingey 1951, Ann. Math. Stat. 22,
//!   592, summed term by term in logarithms) in the far tail, the Durbin matrix (Durbin 1968;
//!   Marsaglia, Tsang & Wang 2003, J. Stat. Softw. 8, 18) and the Pelz-Good series (Pelz &
//!   Good 1976, JRSS B 38, 152) in the body. Where scipy uses the Pomeranz (1974) recursion
//!   (n_e <= 140, 0.754693 < n_e D^2 <= 4) cairn uses the Durbin matrix instead: both are exact
//!   algorithms for the same probability and agree to rounding (the reference tests check
//!   this case).
//! - Auto: exact when both samples have at most 10000 values, else asymptotic (scipy's rule).

use super::check_values;
use super::sorted;
use crate::error::Error;

/// How the p-value is computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum KsMethod {
    /// Exact if max(m, n) <= 10000, else asymptotic.
    Auto,
    /// Exact lattice-path probability.
    Exact,
    /// One-sample Kolmogorov distribution at n_e = round(m n / (m + n)).
    Asymptotic,
}

/// Result of the two-sample KS test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KsTwoSample {
    /// D, the largest distance between the two empirical CDFs.
    pub statistic: f64,
    /// Two-sided p-value.
    pub pvalue: f64,
    /// The method actually used (Exact or Asymptotic).
    pub method: KsMethod,
}

const MAX_AUTO_N: usize = 10_000;

/// Two-sided two-sample KS test of whether `a` and `b` come from the same distribution.
pub fn ks_2samp(a: &[f64], b: &[f64], method: KsMethod) -> Result<KsTwoSample, Error> {
    check_values(a, "values of the first sample", false)?;
    check_values(b, "values of the second sample", false)?;
    let (x, y) = (sorted(a), sorted(b));
    let (n1, n2) = (x.len(), y.len());
    // Walk the merged distinct values; the CDF differences are those scipy forms.
    let (mut i, mut j) = (0, 0);
    let (mut max_diff, mut min_diff) = (f64::NEG_INFINITY, f64::INFINITY);
    while i < n1 || j < n2 {
        let v = match (x.get(i), y.get(j)) {
            (Some(&p), Some(&q)) => p.min(q),
            (Some(&p), None) => p,
            (None, Some(&q)) => q,
            (None, None) => unreachable!(),
        };
        while i < n1 && x[i] <= v {
            i += 1;
        }
        while j < n2 && y[j] <= v {
            j += 1;
        }
        let diff = i as f64 / n1 as f64 - j as f64 / n2 as f64;
        max_diff = max_diff.max(diff);
        min_diff = min_diff.min(diff);
    }
    let min_s = (-min_diff).clamp(0.0, 1.0);
    let mut d = if min_s > max_diff { min_s } else { max_diff };
    let mut method = match method {
        KsMethod::Auto if n1.max(n2) <= MAX_AUTO_N => KsMethod::Exact,
        KsMethod::Auto => KsMethod::Asymptotic,
        m => m,
    };
    let g = gcd(n1, n2);
    if method == KsMethod::Exact && (n1 / g) as f64 >= i32::MAX as f64 / (n2 / g) as f64 {
        method = KsMethod::Asymptotic;
    }
    let mut p = f64::NAN;
    if method == KsMethod::Exact {
        let lcm = (n1 / g) as f64 * n2 as f64;
        let h = (d * lcm).round_ties_even();
        d = h / lcm;
        let h = h as i64;
        p = if h == 0 {
            1.0
        } else if n1 == n2 {
            prob_outside_square(n1 as i64, h)
        } else {
            outer_prob_inside(n1 as i64, n2 as i64, g as i64, h)
        };
        if !(p.is_finite() && (0.0..=1.0).contains(&p)) {
            method = KsMethod::Asymptotic;
        }
    }
    if method == KsMethod::Asymptotic {
        let (m, n) = (n1.max(n2) as f64, n1.min(n2) as f64);
        let en = (m * n / (m + n)).round_ties_even();
        p = kolmogorov_sf(en as u64, d);
    }
    Ok(KsTwoSample {
        statistic: d,
        pvalue: p.clamp(0.0, 1.0),
        method,
    })
}

fn gcd(mut a: usize, mut b: usize) -> usize {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

/// P(D_{n,n} >= h/n) for two samples of equal size n (Hodges 1958), Horner-like form.
fn prob_outside_square(n: i64, h: i64) -> f64 {
    let mut p = 0.0;
    let mut k = n / h;
    while k >= 0 {
        let mut p1 = 1.0;
        for j in 0..h {
            p1 = (n - k * h - j) as f64 * p1 / (n + k * h + j + 1) as f64;
        }
        p = p1 * (1.0 - p);
        k -= 1;
    }
    2.0 * p
}

/// Proportion of lattice paths from (0,0) to (m,n) that leave the band |x/m - y/n| < h/lcm,
/// computed directly by the inside recursion for 1 - p (Hodges 1958; Viehmann 2021).
fn outer_prob_inside(m: i64, n: i64, g: i64, h: i64) -> f64 {
    let (m, n) = if m < n { (n, m) } else { (m, n) };
    let mg = m / g;
    let ng = n / g;
    let mut minj: i64 = 0;
    let mut maxj: i64 = ((h as f64 / mg as f64).ceil() as i64).min(n + 1);
    let mut curlen = maxj - minj;
    let len_a = (2 * maxj + 2).min(n + 1) as usize;
    let mut a = vec![1.0f64; len_a];
    for v in a.iter_mut().take(maxj as usize) {
        *v = 0.0;
    }
    for i in 1..=m {
        let (lastminj, lastlen) = (minj, curlen);
        minj = ((((ng * i - h) as f64) / mg as f64).floor() as i64 + 1).max(0);
        minj = minj.min(n);
        maxj = ((((ng * i + h) as f64) / mg as f64).ceil() as i64).min(n + 1);
        if maxj <= minj {
            return 1.0;
        }
        let mut val = if minj == 0 { 0.0 } else { 1.0 };
        for jj in 0..(maxj - minj) {
            let j = jj + minj;
            val = (a[(jj + minj - lastminj) as usize] * i as f64 + val * j as f64) / (i + j) as f64;
            a[jj as usize] = val;
        }
        curlen = maxj - minj;
        if lastlen > curlen {
            let start = (maxj - minj) as usize;
            let end = (start + (lastlen - curlen) as usize).min(len_a);
            for v in &mut a[start.min(len_a)..end] {
                *v = 1.0;
            }
        }
    }
    a[(maxj - minj - 1) as usize]
}

/// Survival function P(D_n >= x) of the one-sample two-sided Kolmogorov statistic
/// (scipy's `kstwo.sf`, Simard & L'Ecuyer 2011).
pub(crate) fn kolmogorov_sf(n: u64, x: f64) -> f64 {
    if n == 0 || x.is_nan() {
        return f64::NAN;
    }
    let nf = n as f64;
    // Support of kstwo is [1/(2n), 1].
    if x <= 0.5 / nf {
        return 1.0;
    }
    if x >= 1.0 {
        return 0.0;
    }
    let t = nf * x;
    if t <= 1.0 {
        // Ruben-Gambino: P(D_n <= x) = n!/n^n (2t - 1)^n for 1/2n <= x <= 1/n.
        let cdf = if n <= 140 {
            (1..=n).fold(1.0, |p, i| p * (i as f64 * (1.0 / nf) * (2.0 * t - 1.0)))
        } else {
            (log_nfactorial_div_n_pow_n(nf) + nf * (2.0 * t - 1.0).ln()).exp()
        };
        return (1.0 - cdf).clamp(0.0, 1.0);
    }
    if t >= nf - 1.0 {
        return (2.0 * (1.0 - x).powf(nf)).clamp(0.0, 1.0);
    }
    if x >= 0.5 {
        return (2.0 * smirnov_sf(n, x)).clamp(0.0, 1.0);
    }
    let nxsquared = t * x;
    if n <= 140 {
        if nxsquared <= 4.0 {
            // scipy: Durbin matrix up to 0.754693, Pomeranz above; both exact.
            return (1.0 - durbin_cdf(n, x)).clamp(0.0, 1.0);
        }
        return (2.0 * smirnov_sf(n, x)).clamp(0.0, 1.0);
    }
    if nxsquared >= 370.0 {
        return 0.0;
    }
    if nxsquared >= 2.2 {
        return (2.0 * smirnov_sf(n, x)).clamp(0.0, 1.0);
    }
    let cdf = if n <= 100_000 && nf * x.powf(1.5) <= 1.4 {
        durbin_cdf(n, x)
    } else {
        pelz_good_cdf(n, x)
    };
    (1.0 - cdf).clamp(0.0, 1.0)
}

/// log(n! / n^n) by Stirling's series with n log n removed (as scipy's `_ksstats`).
fn log_nfactorial_div_n_pow_n(n: f64) -> f64 {
    // B_2j / (2j (2j - 1)) for j = 8 down to 1.
    const C: [f64; 8] = [
        -3617.0 / 122400.0,
        1.0 / 156.0,
        -691.0 / 360360.0,
        1.0 / 1188.0,
        -1.0 / 1680.0,
        1.0 / 1260.0,
        -1.0 / 360.0,
        1.0 / 12.0,
    ];
    let rn = 1.0 / n;
    let z = rn / n;
    let poly = C.iter().fold(0.0, |acc, &c| acc * z + c);
    n.ln() / 2.0 - n + (2.0 * std::f64::consts::PI).ln() / 2.0 + rn * poly
}

/// One-sided Smirnov survival function P(D+_n >= x), exact, by the Birnbaum-Tingey sum
/// x sum_{j=0}^{floor(n(1-x))} C(n,j) (1-x-j/n)^(n-j) (x+j/n)^(j-1), all terms positive.
fn smirnov_sf(n: u64, x: f64) -> f64 {
    if x <= 0.0 {
        return 1.0;
    }
    if x >= 1.0 {
        return 0.0;
    }
    let nf = n as f64;
    let jmax = (nf * (1.0 - x)).floor() as u64;
    let mut log_binom = 0.0; // ln C(n, 0)
    let mut sum = 0.0;
    for j in 0..=jmax.min(n) {
        if j > 0 {
            log_binom += ((n - j + 1) as f64 / j as f64).ln();
        }
        let base = (nf - nf * x - j as f64) / nf;
        let jf = j as f64;
        if base <= 0.0 {
            if j == n {
                sum += (log_binom + (jf - 1.0) * (x + jf / nf).ln()).exp();
            }
            continue;
        }
        sum += (log_binom + (nf - jf) * base.ln() + (jf - 1.0) * (x + jf / nf).ln()).exp();
    }
    (x * sum).clamp(0.0, 1.0)
}

/// P(D_n <= d) by the Durbin matrix in the form of Marsaglia, Tsang & Wang 2003, with the
/// scaling of scipy's `_kolmogn_DMTW`.
fn durbin_cdf(n: u64, d: f64) -> f64 {
    if d >= 1.0 {
        return 1.0;
    }
    let nf = n as f64;
    let nd = nf * d;
    if nd <= 0.5 {
        return 0.0;
    }
    let k = nd.ceil() as usize;
    let h = k as f64 - nd;
    let m = 2 * k - 1;
    let mut v = vec![0.0; m];
    let mut w = vec![0.0; m];
    let mut fac = 1.0;
    for j in 1..=m {
        w[j - 1] = fac;
        fac /= j as f64;
        v[j - 1] = (1.0 - h.powi(j as i32)) * fac;
    }
    let tt = (2.0 * h - 1.0).max(0.0).powi(m as i32) - 2.0 * h.powi(m as i32);
    v[m - 1] = (1.0 + tt) * fac;
    let mut hm = vec![0.0; m * m];
    for i in 1..m {
        for r in (i - 1)..m {
            hm[r * m + i] = w[r - (i - 1)];
        }
    }
    for r in 0..m {
        hm[r * m] = v[r];
    }
    for c in 0..m {
        hm[(m - 1) * m + c] = v[m - 1 - c];
    }
    let matmul = |a: &[f64], b: &[f64]| {
        let mut out = vec![0.0; m * m];
        for r in 0..m {
            for t in 0..m {
                let art = a[r * m + t];
                if art != 0.0 {
                    for c in 0..m {
                        out[r * m + c] += art * b[t * m + c];
                    }
                }
            }
        }
        out
    };
    let mut pw = vec![0.0; m * m];
    for r in 0..m {
        pw[r * m + r] = 1.0;
    }
    let scale = 2f64.powi(128);
    let (mut expnt, mut hexpnt) = (0i32, 0i32);
    let mut nn = n;
    while nn > 0 {
        if nn % 2 == 1 {
            pw = matmul(&pw, &hm);
            expnt += hexpnt;
        }
        hm = matmul(&hm, &hm);
        hexpnt *= 2;
        if hm[(k - 1) * m + (k - 1)].abs() > scale {
            for e in hm.iter_mut() {
                *e /= scale;
            }
            hexpnt += 128;
        }
        nn /= 2;
    }
    let mut p = pw[(k - 1) * m + (k - 1)];
    for i in 1..=n {
        p = i as f64 * p / nf;
        if p.abs() < 1.0 / scale {
            p *= scale;
            expnt -= 128;
        }
    }
    if expnt != 0 {
        p *= 2f64.powi(expnt);
    }
    p.clamp(0.0, 1.0)
}

/// P(D_n <= x) by the Pelz-Good asymptotic series (as scipy's `_kolmogn_PelzGood`).
fn pelz_good_cdf(n: u64, x: f64) -> f64 {
    use std::f64::consts::PI;
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let nf = n as f64;
    let z = nf.sqrt() * x;
    let (z2, z3, z4, z6) = (z * z, z.powi(3), z.powi(4), z.powi(6));
    let pi2 = PI * PI;
    let pi4 = pi2 * pi2;
    let pi6 = pi4 * pi2;
    let qlog = -pi2 / 8.0 / z2;
    if qlog < -708.0 {
        return 0.0;
    }
    let q = qlog.exp();
    let k1a = -z2;
    let k1b = pi2 / 4.0;
    let k2a = 6.0 * z6 + 2.0 * z4;
    let k2b = (2.0 * z4 - 5.0 * z2) * pi2 / 4.0;
    let k2c = pi4 * (1.0 - 2.0 * z2) / 16.0;
    let k3d = pi6 * (5.0 - 30.0 * z2) / 64.0;
    let k3c = pi4 * (-60.0 * z2 + 212.0 * z4) / 16.0;
    let k3b = pi2 * (135.0 * z4 - 96.0 * z6) / 4.0;
    let k3a = -30.0 * z6 - 90.0 * z.powi(8);
    let mut kk = [0.0f64; 4];
    let maxk = (16.0 * z / PI).ceil() as i64;
    for k in (1..=maxk).rev() {
        let mm = (2 * k - 1) as f64;
        let (m2, m4, m6) = (mm * mm, mm.powi(4), mm.powi(6));
        let qpower = q.powf(8.0 * k as f64);
        let coeffs = [
            1.0,
            k1a + k1b * m2,
            k2a + k2b * m2 + k2c * m4,
            k3a + k3b * m2 + k3c * m4 + k3d * m6,
        ];
        for (c, co) in kk.iter_mut().zip(coeffs) {
            *c = *c * qpower + co;
        }
    }
    let sqrt2pi = (2.0 * PI).sqrt();
    let div = [z, 6.0 * z4, 72.0 * z.powi(7), 6480.0 * z.powi(10)];
    for (c, dv) in kk.iter_mut().zip(div) {
        *c = *c * q * sqrt2pi / dv;
    }
    let q2 = (-pi2 / 2.0 / z2).exp();
    let sqrt3z = 3f64.sqrt() * z;
    let (mut k2extra, mut k3extra) = (0.0, 0.0);
    for k in (1..=maxk).rev() {
        let kf = k as f64;
        let ksq = kf * kf;
        let qp = q2.powf(ksq);
        let kspi = PI * kf;
        k2extra += ksq * qp;
        k3extra += (sqrt3z + kspi) * (sqrt3z - kspi) * ksq * qp;
    }
    kk[2] += k2extra * pi2 * sqrt2pi / (-36.0 * z3);
    kk[3] += k3extra * pi2 * sqrt2pi / (216.0 * z6);
    let mut total = 0.0;
    for (i, c) in kk.iter().enumerate() {
        total += c / nf.powf(i as f64 / 2.0);
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identical_samples_have_zero_distance_and_p_one() {
        let a = [1.0, 2.0, 3.0, 4.0];
        let r = ks_2samp(&a, &a, KsMethod::Auto).unwrap();
        assert_eq!(r.statistic, 0.0);
        assert_eq!(r.pvalue, 1.0);
        assert_eq!(r.method, KsMethod::Exact);
    }

    #[test]
    fn disjoint_equal_samples_by_hand() {
        // Every one of the C(2n, n) orderings is equally likely under the null; only the two
        // fully separated ones reach D = 1, so p = 2 / C(6, 3) = 0.1 for n = 3.
        let r = ks_2samp(&[1.0, 2.0, 3.0], &[4.0, 5.0, 6.0], KsMethod::Exact).unwrap();
        assert_eq!(r.statistic, 1.0);
        assert!((r.pvalue - 0.1).abs() < 1e-15);
        // Unequal sizes 2 and 3: 2 of C(5, 2) = 10 orderings give D = 1.
        let r = ks_2samp(&[1.0, 2.0], &[4.0, 5.0, 6.0], KsMethod::Exact).unwrap();
        assert_eq!(r.statistic, 1.0);
        assert!((r.pvalue - 0.2).abs() < 1e-15);
    }

    /// Null distribution of D * lcm(m, n) by enumerating every arrangement of m + n ranks.
    fn brute_force_counts(m: usize, n: usize) -> Vec<i64> {
        let lcm = (m * n / gcd(m, n)) as i64;
        let mut out = Vec::new();
        for mask in 0u32..(1 << (m + n)) {
            if mask.count_ones() as usize != m {
                continue;
            }
            let (mut i, mut j, mut d) = (0i64, 0i64, 0i64);
            for bit in 0..(m + n) {
                if mask >> bit & 1 == 1 {
                    i += 1;
                } else {
                    j += 1;
                }
                d = d.max((i * lcm / m as i64 - j * lcm / n as i64).abs());
            }
            out.push(d);
        }
        out
    }

    #[test]
    fn exact_p_values_match_full_enumeration() {
        // Self-consistency: under the null every arrangement of the pooled ranks is equally
        // likely, so P(D >= h / lcm) is a count over all C(m + n, m) arrangements.
        for &(m, n) in &[(4usize, 6usize), (5, 7), (6, 6), (3, 9), (8, 5)] {
            let counts = brute_force_counts(m, n);
            let g = gcd(m, n);
            let lcm = (m * n / g) as i64;
            for h in 1..=lcm {
                let brute = counts.iter().filter(|&&d| d >= h).count() as f64 / counts.len() as f64;
                let ours = if m == n {
                    prob_outside_square(m as i64, h)
                } else {
                    outer_prob_inside(m as i64, n as i64, g as i64, h)
                };
                assert!(
                    (ours.min(1.0) - brute).abs() < 1e-12,
                    "m {m} n {n} h {h}: {ours} vs {brute}"
                );
            }
        }
    }

    #[test]
    fn auto_switches_to_asymptotic_above_ten_thousand() {
        let a: Vec<f64> = (0..10_001).map(|i| i as f64).collect();
        let b: Vec<f64> = (0..10_002).map(|i| i as f64 + 500.5).collect();
        let auto = ks_2samp(&a, &b, KsMethod::Auto).unwrap();
        let asym = ks_2samp(&a, &b, KsMethod::Asymptotic).unwrap();
        assert_eq!(auto.method, KsMethod::Asymptotic);
        assert_eq!(auto, asym);
        let small = ks_2samp(&a[..100], &b[..120], KsMethod::Auto).unwrap();
        assert_eq!(small.method, KsMethod::Exact);
    }

    #[test]
    fn kolmogorov_algorithms_agree_where_they_overlap() {
        // Durbin's matrix is exact for every x; the Birnbaum-Tingey tail (2 x one-sided) is
        // exact for x >= 1/2 and a close bound below; Pelz-Good is an asymptotic series.
        for &(n, x) in &[(30u64, 0.5), (60, 0.55)] {
            let exact = 1.0 - durbin_cdf(n, x);
            let tail = 2.0 * smirnov_sf(n, x);
            assert!((exact - tail).abs() <= 1e-12 + 1e-9 * tail, "n {n} x {x}");
        }
        for &(n, x) in &[(400u64, 0.05), (1000, 0.03), (2000, 0.025)] {
            let exact = durbin_cdf(n, x);
            let series = pelz_good_cdf(n, x);
            assert!(
                (exact - series).abs() < 1e-6,
                "n {n} x {x}: {exact} {series}"
            );
        }
        // The Ruben-Gambino closed form meets the matrix at t = n x just below 1.
        let (n, x) = (20u64, 0.049);
        let rg = 1.0 - kolmogorov_sf(n, x);
        assert!((rg - durbin_cdf(n, x)).abs() < 1e-12);
    }
}

//! k-sample Anderson-Darling test (Scholz & Stephens 1987, JASA 82, 918), midrank version,
//! following `scipy.stats.anderson_ksamp(samples, variant='midrank')` 1.17.
//!
//! - A2akN is Scholz & Stephens' equation 7 (their A^2_akN, midranks for ties), valid for
//!   continuous and discrete data.
//! - The standardised statistic is (A2akN - (k - 1)) / sigma_N with sigma_N^2 from their
//!   equations 4-5 (the exact variance under the null for continuous data).
//! - The p-value interpolates their Table 2: critical values
//!   t_p = b0 + b1/sqrt(k - 1) + b2/(k - 1) at significance levels
//!   0.25, 0.1, 0.05, 0.025, 0.01, 0.005, 0.001; a quadratic is fitted by least squares to
//!   ln(level) against t_p (numpy's `polyfit`: column-scaled Vandermonde matrix, solved here
//!   by Householder QR) and evaluated at the statistic. As in scipy's default mode, the p-value
//!   is capped to the table's range: a statistic below the smallest critical value gives 0.25
//!   and one above the largest gives 0.001; [`AndersonKSample::pvalue_capped`] says when this
//!   happened (scipy warns). Interpolated values are only as good as the table (about two
//!   significant digits, by the authors' account).

use super::{check_values, sorted};
use crate::error::Error;

/// Result of the k-sample Anderson-Darling test.
#[derive(Debug, Clone, PartialEq)]
pub struct AndersonKSample {
    /// Standardised statistic (A2akN - (k - 1)) / sigma_N, scipy's `statistic`.
    pub statistic: f64,
    /// The unstandardised A2akN.
    pub a2akn: f64,
    /// Critical values of the standardised statistic at [`SIGNIFICANCE_LEVELS`].
    pub critical_values: [f64; 7],
    /// Approximate p-value, within [0.001, 0.25].
    pub pvalue: f64,
    /// Whether the p-value hit the table's limit (true value above 0.25 or below 0.001).
    pub pvalue_capped: bool,
}

/// Significance levels of Scholz & Stephens' Table 2.
pub const SIGNIFICANCE_LEVELS: [f64; 7] = [0.25, 0.1, 0.05, 0.025, 0.01, 0.005, 0.001];

/// Tests whether k >= 2 samples come from one distribution.
pub fn anderson_ksamp(samples: &[&[f64]]) -> Result<AndersonKSample, Error> {
    let k = samples.len();
    if k < 2 {
        return Err(Error::usage(
            "the Anderson-Darling k-sample test needs at least two samples",
        ));
    }
    for s in samples {
        check_values(s, "values of every sample", false)?;
    }
    let all: Vec<f64> = sorted(&samples.concat());
    let nn = all.len();
    let nf = nn as f64;
    // Distinct values, with the number of all observations below each (left) and equal (l_j).
    let mut zstar: Vec<f64> = Vec::new();
    let mut left: Vec<f64> = Vec::new();
    let mut lj: Vec<f64> = Vec::new();
    let mut i = 0;
    while i < nn {
        let v = all[i];
        let start = i;
        while i < nn && all[i] == v {
            i += 1;
        }
        zstar.push(v);
        left.push(start as f64);
        lj.push((i - start) as f64);
    }
    if zstar.len() < 2 {
        return Err(Error::usage(
            "the Anderson-Darling test needs more than one distinct value among all samples",
        ));
    }
    let bj: Vec<f64> = left.iter().zip(&lj).map(|(l, c)| l + c / 2.0).collect();
    let mut a2akn = 0.0;
    for s in samples {
        let s = sorted(s);
        let ni = s.len() as f64;
        let mut sum = 0.0;
        for (j, &z) in zstar.iter().enumerate() {
            let right = s.partition_point(|&x| x <= z) as f64;
            let leftc = s.partition_point(|&x| x < z) as f64;
            let mij = right - (right - leftc) / 2.0;
            let num = nf * mij - bj[j] * ni;
            sum += lj[j] / nf * num * num / (bj[j] * (nf - bj[j]) - nf * lj[j] / 4.0);
        }
        a2akn += sum / ni;
    }
    a2akn *= (nf - 1.0) / nf;

    let kf = k as f64;
    let hh: f64 = samples.iter().map(|s| 1.0 / s.len() as f64).sum();
    // hs_cs[t] = sum_{u=0}^{t} 1/(N-1-u), t = 0..N-3 (i.e. 1/(N-1) + ... + 1/(N-1-t)).
    let mut hs = 0.0;
    let mut g = 0.0;
    for t in 0..nn.saturating_sub(2) {
        hs += 1.0 / (nn - 1 - t) as f64;
        g += hs / (t + 2) as f64;
    }
    let h = hs + 1.0;
    let a = (4.0 * g - 6.0) * (kf - 1.0) + (10.0 - 6.0 * g) * hh;
    let b = (2.0 * g - 4.0) * kf * kf + 8.0 * h * kf + (2.0 * g - 14.0 * h - 4.0) * hh - 8.0 * h
        + 4.0 * g
        - 6.0;
    let c = (6.0 * h + 2.0 * g - 2.0) * kf * kf
        + (4.0 * h - 4.0 * g + 6.0) * kf
        + (2.0 * h - 6.0) * hh
        + 4.0 * h;
    let d = (2.0 * h + 6.0) * kf * kf - 4.0 * h * kf;
    let sigmasq =
        (a * nf.powi(3) + b * nf * nf + c * nf + d) / ((nf - 1.0) * (nf - 2.0) * (nf - 3.0));
    let m = kf - 1.0;
    let statistic = (a2akn - m) / sigmasq.sqrt();

    const B0: [f64; 7] = [0.675, 1.281, 1.645, 1.96, 2.326, 2.573, 3.085];
    const B1: [f64; 7] = [-0.245, 0.25, 0.678, 1.149, 1.822, 2.364, 3.615];
    const B2: [f64; 7] = [-0.105, -0.305, -0.362, -0.391, -0.396, -0.345, -0.154];
    let mut critical = [0.0; 7];
    for t in 0..7 {
        critical[t] = B0[t] + B1[t] / m.sqrt() + B2[t] / m;
    }
    let cmin = critical.iter().copied().fold(f64::INFINITY, f64::min);
    let cmax = critical.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let (pvalue, capped) = if statistic < cmin {
        (0.25, true)
    } else if statistic > cmax {
        (0.001, true)
    } else {
        let ln_sig = SIGNIFICANCE_LEVELS.map(f64::ln);
        let coef = polyfit2(&critical, &ln_sig);
        ((coef[0] * statistic + coef[1]) * statistic + coef[2], false)
    };
    let pvalue = if capped { pvalue } else { pvalue.exp() };
    Ok(AndersonKSample {
        statistic,
        a2akn,
        critical_values: critical,
        pvalue,
        pvalue_capped: capped,
    })
}

/// Least-squares quadratic [c2, c1, c0] through (x, y), highest power first, as numpy's
/// `polyfit(x, y, 2)`: Vandermonde columns scaled to unit norm, then Householder QR.
/// (Index loops mirror the matrix algebra.)
#[allow(clippy::needless_range_loop)]
fn polyfit2(x: &[f64], y: &[f64]) -> [f64; 3] {
    let n = x.len();
    let mut a: Vec<[f64; 3]> = x.iter().map(|&v| [v * v, v, 1.0]).collect();
    let mut scale = [0.0; 3];
    for (c, s) in scale.iter_mut().enumerate() {
        *s = a.iter().map(|r| r[c] * r[c]).sum::<f64>().sqrt();
        for r in a.iter_mut() {
            r[c] /= *s;
        }
    }
    let mut b = y.to_vec();
    for col in 0..3 {
        let norm = (col..n).map(|r| a[r][col] * a[r][col]).sum::<f64>().sqrt();
        let alpha = if a[col][col] > 0.0 { -norm } else { norm };
        let mut v: Vec<f64> = (col..n).map(|r| a[r][col]).collect();
        v[0] -= alpha;
        let vnorm2: f64 = v.iter().map(|e| e * e).sum();
        if vnorm2 == 0.0 {
            continue;
        }
        for c in col..3 {
            let dot: f64 = (col..n).map(|r| v[r - col] * a[r][c]).sum();
            let f = 2.0 * dot / vnorm2;
            for r in col..n {
                a[r][c] -= f * v[r - col];
            }
        }
        let dot: f64 = (col..n).map(|r| v[r - col] * b[r]).sum();
        let f = 2.0 * dot / vnorm2;
        for r in col..n {
            b[r] -= f * v[r - col];
        }
    }
    let mut coef = [0.0; 3];
    for row in (0..3).rev() {
        let mut s = b[row];
        for c in (row + 1)..3 {
            s -= a[row][c] * coef[c];
        }
        coef[row] = s / a[row][row];
    }
    for c in 0..3 {
        coef[c] /= scale[c];
    }
    coef
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn polyfit_recovers_an_exact_quadratic() {
        let x = [0.5, 1.0, 1.5, 2.0, 3.0, 4.0, 5.0];
        let y: Vec<f64> = x.iter().map(|v| 0.3 * v * v - 1.2 * v + 2.0).collect();
        let c = polyfit2(&x, &y);
        assert!((c[0] - 0.3).abs() < 1e-13 && (c[1] + 1.2).abs() < 1e-13);
        assert!((c[2] - 2.0).abs() < 1e-13);
    }

    #[test]
    fn separated_samples_floor_the_p_value_and_one_sample_is_refused() {
        let a: Vec<f64> = (0..30).map(|i| i as f64).collect();
        let b: Vec<f64> = (0..30).map(|i| 100.0 + i as f64).collect();
        let r = anderson_ksamp(&[&a, &b]).unwrap();
        assert!(r.pvalue_capped && r.pvalue == 0.001 && r.statistic > r.critical_values[6]);
        assert!(anderson_ksamp(&[&a]).is_err());
        assert!(anderson_ksamp(&[&[1.0, 1.0], &[1.0]]).is_err());
    }
}

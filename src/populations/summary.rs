//! Median and percentiles by linear interpolation between order statistics (numpy's default
//! "linear" method; Hyndman & Fan 1996, The American Statistician 50, 361, definition 7).

use super::{check_values, sorted};
use crate::error::Error;

/// The q-th percentile (0 <= q <= 100) of already sorted values, by linear interpolation.
pub(crate) fn percentile_sorted(sorted: &[f64], q: f64) -> f64 {
    let n = sorted.len();
    if n == 1 {
        return sorted[0];
    }
    let pos = q / 100.0 * (n - 1) as f64;
    let lo = pos.floor() as usize;
    let hi = (lo + 1).min(n - 1);
    let frac = pos - lo as f64;
    let (a, b) = (sorted[lo], sorted[hi]);
    // numpy's lerp form, exact at both ends.
    if frac >= 0.5 {
        b - (b - a) * (1.0 - frac)
    } else {
        a + (b - a) * frac
    }
}

/// The q-th percentile (0 <= q <= 100) of finite values, linear interpolation (numpy default).
pub fn percentile(values: &[f64], q: f64) -> Result<f64, Error> {
    Ok(percentiles(values, &[q])?[0])
}

/// Several percentiles at once (one sort).
pub fn percentiles(values: &[f64], qs: &[f64]) -> Result<Vec<f64>, Error> {
    check_values(values, "values", false)?;
    if let Some(q) = qs.iter().find(|q| !(0.0..=100.0).contains(*q)) {
        return Err(Error::usage(format!(
            "percentile {q} is outside 0 to 100; give a value between 0 and 100"
        )));
    }
    let s = sorted(values);
    Ok(qs.iter().map(|&q| percentile_sorted(&s, q)).collect())
}

/// The median (the 50th percentile; the mean of the two middle values for an even count).
pub fn median(values: &[f64]) -> Result<f64, Error> {
    percentile(values, 50.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn median_of_odd_and_even_counts() {
        assert_eq!(median(&[3.0, 1.0, 2.0]).unwrap(), 2.0);
        assert_eq!(median(&[4.0, 1.0, 2.0, 3.0]).unwrap(), 2.5);
    }

    #[test]
    fn percentiles_interpolate_linearly() {
        let v = [10.0, 20.0, 30.0, 40.0, 50.0];
        let p = percentiles(&v, &[0.0, 25.0, 10.0, 100.0]).unwrap();
        assert_eq!(p, vec![10.0, 20.0, 14.0, 50.0]);
        assert!(percentile(&v, 101.0).is_err());
        assert!(median(&[]).is_err());
        assert!(median(&[1.0, f64::NAN]).is_err());
    }
}

//! Median and percentiles by linear interpolation between order statistics: numpy's default
//! "linear" method (Hyndman & Fan 1996, The American Statistician 50, 361, definition 7),
//! written as numpy 2.4 computes it (`numpy.lib._function_base_impl._quantile` and `_lerp`):
//! the percentile p of n sorted values sits at the virtual index v = (n - 1) (p / 100); with
//! i = floor(v) (the last index when v >= n - 1) and t = v - i, the value is
//! a + (b - a) t for t < 0.5 and b - (b - a) (1 - t) for t >= 0.5, a and b the values at i and
//! i + 1. The values are sorted once (a stable sort, so any number of equal values costs the
//! same as distinct ones).

use super::check_values;
use crate::error::Error;

/// The percentiles `qs` (0 to 100, checked by the caller) of `values` (finite, at least one;
/// NaN for each percentile when there are none).
pub(crate) fn quantiles_of(values: &[f64], qs: &[f64]) -> Vec<f64> {
    if values.is_empty() {
        return vec![f64::NAN; qs.len()];
    }
    let s = super::sorted(values);
    let n = s.len();
    qs.iter()
        .map(|&p| {
            let v = (n - 1) as f64 * (p / 100.0);
            if v >= (n - 1) as f64 {
                return s[n - 1];
            }
            let i = v.floor().max(0.0) as usize;
            let t = v - i as f64;
            let (a, b) = (s[i], s[i + 1]);
            let diff = b - a;
            if t >= 0.5 {
                b - diff * (1.0 - t)
            } else {
                a + diff * t
            }
        })
        .collect()
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
    Ok(quantiles_of(values, qs))
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

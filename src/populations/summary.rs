//! Median and percentiles by linear interpolation between order statistics (numpy's default
//! "linear" method; Hyndman & Fan 1996, The American Statistician 50, 361, definition 7),
//! computed by ndarray-stats' quantiles (`Quantile1dExt::quantiles_mut` with its `Linear`
//! interpolation: the quantile q of n values sits at position q (n - 1) of their order).

use super::check_values;
use crate::error::Error;
use ndarray::Array1;
use ndarray_stats::{Quantile1dExt, interpolate::Linear};
use noisy_float::types::{N64, n64};

/// The percentiles `qs` (0 to 100, checked by the caller) of `values` (finite, at least one).
pub(crate) fn quantiles_of(values: &[f64], qs: &[f64]) -> Vec<f64> {
    let mut a: Array1<N64> = values.iter().map(|&v| n64(v)).collect();
    let q: Array1<N64> = qs.iter().map(|&q| n64(q / 100.0)).collect();
    // Only an empty array or a q outside 0 to 1 can fail, and callers exclude both.
    match a.quantiles_mut(&q, &Linear) {
        Ok(r) => r.iter().map(|v| v.raw()).collect(),
        Err(_) => vec![f64::NAN; qs.len()],
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

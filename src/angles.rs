//! Formatting of sky angles for people: sexagesimal hours and degrees, and angular sizes.
//!
//! Owns the text forms of coordinates shown in summaries and on figure axes. Rounding is
//! carried through the fields (59.9995 s becomes 00 s of the next minute), as is common
//! practice.

/// Right ascension in degrees as `HHhMMmSS.SSs` with `decimals` decimals of seconds.
pub fn format_hms(ra_deg: f64, decimals: usize) -> String {
    let total = ra_deg.rem_euclid(360.0) / 15.0 * 3600.0;
    let (h, m, s) = split_sexagesimal(total, decimals, 24);
    format!("{h:02}h{m:02}m{s}s")
}

/// Declination or latitude in degrees as `+DDdMMmSS.Ss` with `decimals` decimals of seconds.
pub fn format_dms(dec_deg: f64, decimals: usize) -> String {
    let sign = if dec_deg < 0.0 { '-' } else { '+' };
    let (d, m, s) = split_sexagesimal(dec_deg.abs() * 3600.0, decimals, 1000);
    format!("{sign}{d:02}d{m:02}m{s}s")
}

fn split_sexagesimal(total_seconds: f64, decimals: usize, wrap: u64) -> (u64, u64, String) {
    let scale = 10f64.powi(decimals as i32);
    let ticks = (total_seconds * scale).round() as u64;
    let per_min = 60 * scale as u64;
    let per_unit = 3600 * scale as u64;
    let units = (ticks / per_unit) % wrap;
    let mins = (ticks % per_unit) / per_min;
    let rest = (ticks % per_min) as f64 / scale;
    let width = if decimals > 0 { decimals + 3 } else { 2 };
    (units, mins, format!("{rest:0width$.decimals$}"))
}

/// An angular size in the most readable unit (arcsec below 2 arcmin, arcmin below 2 deg).
pub fn format_angle(deg: f64) -> String {
    let a = deg.abs();
    if a < 2.0 / 60.0 {
        format!("{:.3}\"", deg * 3600.0)
    } else if a < 2.0 {
        format!("{:.3}'", deg * 60.0)
    } else {
        format!("{deg:.4} deg")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sexagesimal_forms_round_through_their_fields() {
        // 133.6879 deg = 8h54m45.096s (15 degrees per hour: common practice).
        assert_eq!(format_hms(133.6879, 2), "08h54m45.10s");
        // 6.725833 deg = 6d43m32.9988s.
        assert_eq!(format_dms(-6.725833, 1), "-06d43m33.0s");
        assert_eq!(format_hms(359.99999999, 1), "00h00m00.0s");
        assert_eq!(format_dms(10.0 - 1e-9, 0), "+10d00m00s");
        assert_eq!(format_angle(18.2 / 3600.0), "18.200\"");
    }
}

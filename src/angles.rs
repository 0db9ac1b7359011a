//! Sky angles for people: sexagesimal hours and degrees and angular sizes, written and read.
//!
//! Owns the text forms of coordinates shown in summaries and on figure axes, and reading
//! coordinates typed in either form (`152.8125` or `10h11m15s`; `+11.406` or `+11d24m22.5s`).
//! Rounding is carried through the fields (59.9995 s becomes 00 s of the next minute), as is
//! common practice; an hour of right ascension is 15 degrees.

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

/// Reads a longitude typed in degrees (`152.8125`) or sexagesimally, in hours (`10h11m15s`,
/// `10h11m15.25s`, `10h11.25m`; only where `hours` allows, the longitude of an equatorial
/// frame) or degrees (`152d48m45s`), as degrees; `None` if not understood. The letters name
/// the fields, in the order hours or degrees, minutes, seconds, none left out before the last
/// (`10h11s` is not read); minutes and seconds lie below 60, and only the last field may have
/// decimals.
pub fn parse_longitude(text: &str, hours: bool) -> Option<f64> {
    parse_angle(text, hours)
}

/// Reads a latitude typed in degrees (`-31.625`) or sexagesimal degrees (`-31d37m30s`,
/// `+11d24m22.5s`), as degrees; `None` if not understood.
pub fn parse_latitude(text: &str) -> Option<f64> {
    parse_angle(text, false)
}

/// Whether `text` is a plain number (degrees, or pixels where the context says so) rather
/// than a sexagesimal angle.
pub fn is_plain_number(text: &str) -> bool {
    text.trim().parse::<f64>().is_ok()
}

fn parse_angle(text: &str, hours_allowed: bool) -> Option<f64> {
    let t = text.trim();
    if let Ok(v) = t.parse::<f64>() {
        return v.is_finite().then_some(v);
    }
    let (sign, body) = match t.as_bytes().first()? {
        b'-' => (-1.0, &t[1..]),
        b'+' => (1.0, &t[1..]),
        _ => (1.0, t),
    };
    // Fields: a number and its letter each, in the order (h|d), m, s.
    let mut fields: Vec<(f64, char, bool)> = Vec::new();
    let mut rest = body.trim_start();
    while !rest.is_empty() {
        let end = rest
            .find(|c: char| !(c.is_ascii_digit() || c == '.'))
            .unwrap_or(rest.len());
        let (num, after) = rest.split_at(end);
        if num.is_empty() || num.matches('.').count() > 1 || num.starts_with('.') {
            return None;
        }
        let letter = after.chars().next()?;
        fields.push((
            num.parse().ok()?,
            letter.to_ascii_lowercase(),
            num.contains('.'),
        ));
        rest = after[letter.len_utf8()..].trim_start();
    }
    let (first, unit_letter) = match *fields.first()? {
        (v, 'h', _) if hours_allowed && sign > 0.0 && !t.starts_with('+') => (v, 'h'),
        (v, 'd', _) => (v, 'd'),
        _ => return None,
    };
    if fields.len() > 3 || fields.iter().rev().skip(1).any(|f| f.2) {
        // Decimals only on the last field.
        return None;
    }
    let mut value = first;
    for (&(v, letter, _), (want, scale)) in fields.iter().skip(1).zip([('m', 60.0), ('s', 3600.0)])
    {
        if letter != want || v >= 60.0 {
            return None;
        }
        value += v / scale;
    }
    let deg = if unit_letter == 'h' {
        if value >= 24.0 {
            return None;
        }
        value * 15.0
    } else {
        value
    };
    let deg = sign * deg;
    deg.is_finite().then_some(deg)
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

    fn parse_longitude_h(text: &str) -> Option<f64> {
        parse_longitude(text, true)
    }

    /// Sexagesimal coordinates as typed, against their values by definition (15 degrees per
    /// hour, 60 minutes per unit, 60 seconds per minute: common practice), and what the
    /// summaries print read back to the value printed.
    #[test]
    fn sexagesimal_coordinates_are_read() {
        let close = |a: Option<f64>, b: f64| a.is_some_and(|a| (a - b).abs() < 1e-12);
        assert!(close(parse_longitude_h("10h11m15s"), 152.8125));
        assert!(close(
            parse_longitude_h("10h11m15.25s"),
            15.0 * (10.0 + 11.0 / 60.0 + 15.25 / 3600.0)
        ));
        assert!(close(parse_longitude_h("10h11.25m"), 152.8125));
        assert!(close(parse_longitude_h(" 10h 11m 15s "), 152.8125));
        assert!(close(parse_longitude_h("152d48m45s"), 152.8125));
        assert!(close(parse_longitude_h("152.8125"), 152.8125));
        assert!(close(
            parse_latitude("+11d24m22.5s"),
            11.0 + 24.0 / 60.0 + 22.5 / 3600.0
        ));
        assert!(close(parse_latitude("-31d37m30s"), -31.625));
        assert!(close(parse_latitude("-0d30m"), -0.5));
        assert!(close(parse_latitude("-31.625"), -31.625));
        // What inspect prints reads back to its value to the printed precision.
        assert!(close(parse_longitude_h(&format_hms(152.8125, 2)), 152.8125));
        assert!(close(parse_latitude(&format_dms(-31.625, 1)), -31.625));
        // Refused: hours for a latitude, fields out of order or range, decimals before the
        // last field, signed hours, stray text.
        for bad in [
            "10h75m",
            "10h11m60s",
            "24h",
            "10.5h11m",
            "10h11.5m15s",
            "10s11m",
            "-10h11m",
            "+10h",
            "10h11x",
            "abc",
            "",
            "1.2.3d",
        ] {
            let lon = parse_longitude_h(bad);
            assert!(lon.is_none(), "{bad:?} should be refused, got {lon:?}");
        }
        assert!(parse_latitude("10h11m15s").is_none());
        // Hours only where allowed; skipped fields and numbers beyond range are refused.
        assert!(parse_longitude("10h11m15s", false).is_none());
        assert!(close(parse_longitude("152d48m45s", false), 152.8125));
        assert!(parse_longitude_h("10h11s").is_none());
        assert!(parse_latitude(&format!("1{}d", "0".repeat(400))).is_none());
        assert!(is_plain_number("152.8") && !is_plain_number("10h11m"));
    }
}

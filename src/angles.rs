//! Sky angles for people: sexagesimal hours and degrees and angular sizes, written and read.
//!
//! Owns the text forms of coordinates shown in summaries and on figure axes, and reading
//! coordinates typed in either form (`152.8125`, `10h11m15s` or `10:11:15`; `+11.406`,
//! `+11d24m22.5s` or `+11:24:22.5`).
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
/// `10h11m15.25s`, `10h11.25m`, or with colons `10:11:15`, `10:11.25`; only where `hours`
/// allows, the longitude of an equatorial frame) or degrees (`152d48m45s`), as degrees; `None`
/// if not understood. The letters name the fields, in the order hours or degrees, minutes,
/// seconds, none left out before the last (`10h11s` is not read); minutes and seconds lie
/// below 60, and only the last field may have decimals. Colons separate hours, minutes and
/// seconds, as right ascensions are written in catalogues (common practice); a longitude in
/// degrees is never written with colons here, so where `hours` is false they are refused.
pub fn parse_longitude(text: &str, hours: bool) -> Option<f64> {
    parse_angle(text, hours, hours.then_some('h'))
}

/// Reads a latitude typed in degrees (`-31.625`) or sexagesimal degrees (`-31d37m30s`,
/// `+11d24m22.5s`, or with colons `-31:37:30`, `+11:24:22.5`), as degrees; `None` if not
/// understood.
pub fn parse_latitude(text: &str) -> Option<f64> {
    parse_angle(text, false, Some('d'))
}

/// Whether `text` is written with colons between its fields (`10:11:15`), which
/// [`parse_longitude`] reads as hours.
pub fn has_colons(text: &str) -> bool {
    text.contains(':')
}

/// Whether `text` is a plain number (degrees, or pixels where the context says so) rather
/// than a sexagesimal angle.
pub fn is_plain_number(text: &str) -> bool {
    text.trim().parse::<f64>().is_ok()
}

/// Reads an angle in degrees, or sexagesimal with letters (hours only where `hours_allowed`)
/// or with colons, whose first field is in `colon_unit` ('h' or 'd'; colons refused if
/// `None`).
fn parse_angle(text: &str, hours_allowed: bool, colon_unit: Option<char>) -> Option<f64> {
    let t = text.trim();
    if let Ok(v) = t.parse::<f64>() {
        return v.is_finite().then_some(v);
    }
    let (sign, body) = match t.as_bytes().first()? {
        b'-' => (-1.0, &t[1..]),
        b'+' => (1.0, &t[1..]),
        _ => (1.0, t),
    };
    // Fields: a number and its letter each, in the order (h|d), m, s; with colons, the
    // letters are implied by the position (two or three fields).
    let mut fields: Vec<(f64, char, bool)> = Vec::new();
    if body.contains(':') {
        let unit = colon_unit?;
        let parts: Vec<&str> = body.split(':').collect();
        if !(2..=3).contains(&parts.len()) {
            return None;
        }
        for (part, letter) in parts.iter().zip([unit, 'm', 's']) {
            let num = part.trim();
            if num.is_empty()
                || !num.chars().all(|c| c.is_ascii_digit() || c == '.')
                || num.matches('.').count() > 1
                || num.starts_with('.')
            {
                return None;
            }
            fields.push((num.parse().ok()?, letter, num.contains('.')));
        }
    }
    let mut rest = if fields.is_empty() {
        body.trim_start()
    } else {
        ""
    };
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

    /// Colons separate the same fields as the letters: hours, minutes, seconds for a
    /// longitude where hours are allowed (a right ascension), degrees, minutes, seconds for a
    /// latitude; each colon form reads to the value of its letter form.
    #[test]
    fn colon_sexagesimal_reads_as_its_letter_form() {
        for (colons, letters) in [
            ("10:11:15", "10h11m15s"),
            ("10:11:15.25", "10h11m15.25s"),
            ("10:11.25", "10h11.25m"),
            (" 10:11:15 ", "10h11m15s"),
            ("00:00:00", "0h"),
        ] {
            assert_eq!(
                parse_longitude_h(colons),
                parse_longitude_h(letters),
                "{colons}"
            );
            assert!(parse_longitude_h(colons).is_some(), "{colons}");
        }
        for (colons, letters) in [
            ("+11:24:22.5", "+11d24m22.5s"),
            ("-31:37:30", "-31d37m30s"),
            ("-00:30", "-0d30m"),
            ("11:24", "11d24m"),
        ] {
            assert_eq!(parse_latitude(colons), parse_latitude(letters), "{colons}");
            assert!(parse_latitude(colons).is_some(), "{colons}");
        }
        // Refused: colons on a longitude in degrees (hours not allowed), signed hours, one
        // field or more than three, ranges, decimals before the last field, letters mixed in,
        // empty fields.
        assert!(parse_longitude("152:48:45", false).is_none());
        for bad in [
            "-10:11:15",
            "+10:11:15",
            "10:",
            ":11",
            "10:11:15:1",
            "24:00:00",
            "10:60:00",
            "10:11:60",
            "10.5:11",
            "10:11.5:15",
            "10h:11m",
            "10::15",
            "1e1:11",
        ] {
            assert!(
                parse_longitude_h(bad).is_none(),
                "{bad:?} should be refused"
            );
        }
        for bad in ["11:60", "-11:24:60", "11:24:22.5:1", "11:-24"] {
            assert!(parse_latitude(bad).is_none(), "{bad:?} should be refused");
        }
        assert!(has_colons("10:11") && !has_colons("10h11m"));
    }
}

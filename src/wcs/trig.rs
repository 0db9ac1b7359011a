//! Trigonometry in degrees, exact at multiples of 90 degrees (so that, e.g., a celestial pole
//! at the reference point gives cos = 0 exactly, which the special cases of Paper II
//! sec. 2.4 test for).

pub const D2R: f64 = std::f64::consts::PI / 180.0;
pub const R2D: f64 = 180.0 / std::f64::consts::PI;

/// sin and cos of an angle in degrees.
pub fn sincosd(a: f64) -> (f64, f64) {
    if a.is_finite() && a.fract() == 0.0 && (a as i64) % 90 == 0 {
        let q = (a as i64 / 90).rem_euclid(4);
        return [(0.0, 1.0), (1.0, 0.0), (0.0, -1.0), (-1.0, 0.0)][q as usize];
    }
    let r = (a % 360.0) * D2R;
    r.sin_cos()
}

pub fn sind(a: f64) -> f64 {
    sincosd(a).0
}

pub fn cosd(a: f64) -> f64 {
    sincosd(a).1
}

pub fn tand(a: f64) -> f64 {
    let (s, c) = sincosd(a);
    s / c
}

pub fn asind(s: f64) -> f64 {
    if s >= 1.0 {
        90.0
    } else if s <= -1.0 {
        -90.0
    } else {
        s.asin() * R2D
    }
}

pub fn acosd(c: f64) -> f64 {
    if c >= 1.0 {
        0.0
    } else if c <= -1.0 {
        180.0
    } else {
        c.acos() * R2D
    }
}

pub fn atan2d(y: f64, x: f64) -> f64 {
    y.atan2(x) * R2D
}

/// A longitude in [0, 360).
pub fn norm360(a: f64) -> f64 {
    let v = a.rem_euclid(360.0);
    if v >= 360.0 { 0.0 } else { v }
}

/// An angle in [-180, 180].
pub fn norm180(a: f64) -> f64 {
    let mut v = a.rem_euclid(360.0);
    if v > 180.0 {
        v -= 360.0;
    }
    v
}

//! Conversions between celestial reference frames: ICRS, FK5 (equinox J2000) and galactic.
//!
//! All conversions are fixed rotations of the unit vector:
//!
//! * ICRS -> FK5 J2000: the frame bias B = R1(-eta0) R2(xi0) R3(da0) with the FK5 pole offsets
//!   eta0 = -19.9 mas, xi0 = +9.1 mas and the equinox offset da0 = -22.9 mas (Mignard &
//!   Froeschle 2000, A&A 354, 732; the rotation adopted by astropy.coordinates). The bias is
//!   included: FK5 J2000 and ICRS differ by up to ~25 mas.
//! * FK5 J2000 -> galactic: R3(180 - l_NCP) R2(90 - delta_NGP) R3(alpha_NGP), the IAU 1958
//!   galactic system (Blaauw et al. 1960, MNRAS 121, 123) with its north pole and the
//!   galactic longitude of the north celestial pole expressed in FK5 J2000 as adopted by
//!   astropy.coordinates.Galactic: alpha_NGP = 192.8594812065348 deg, delta_NGP =
//!   27.12825118085622 deg, l_NCP = 122.9319185680026 deg (the Hipparcos catalogue,
//!   ESA 1997, vol. 1 sec. 1.5.3, gives the same pole to its quoted 1e-5 degree).
//!
//! * FK5 J2000 -> FK5 at another Julian equinox: the IAU 2006 precession (Capitaine et al.
//!   2003, A&A 412, 567; Hilton et al. 2006, Celest. Mech. Dyn. Astr. 94, 351) as the
//!   Fukushima-Williams angles gamma_bar, phi_bar, psi_bar, epsilon_A (IERS Conventions 2010,
//!   eqs. 5.39-5.40): P(t) = F(t) F(0)^T with F = R1(-eps_A) R3(-psi_bar) R1(phi_bar)
//!   R3(gamma_bar), t in Julian centuries of TT from J2000 (the equinox in Julian years taken
//!   as a TT epoch), which is the precession astropy.coordinates.FK5 applies.
//!
//! Here R1, R2, R3 are rotations of the coordinate system about the x, y, z axes:
//! R3(a) = [[cos a, sin a, 0], [-sin a, cos a, 0], [0, 0, 1]], and likewise for x and y.
//! FK4 and ecliptic frames are not converted (`None`).

use super::SkyFrame;
use super::trig::{atan2d, norm360, sincosd};

type Mat = [[f64; 3]; 3];

const ALPHA_NGP_J2000: f64 = 192.859_481_206_534_8;
const DELTA_NGP_J2000: f64 = 27.128_251_180_856_22;
const L_NCP_J2000: f64 = 122.931_918_568_002_6;

fn rot(axis: usize, angle_deg: f64) -> Mat {
    let (s, c) = sincosd(angle_deg);
    let mut m = [[0.0; 3]; 3];
    m[axis][axis] = 1.0;
    let a1 = (axis + 1) % 3;
    let a2 = (axis + 2) % 3;
    m[a1][a1] = c;
    m[a1][a2] = s;
    m[a2][a1] = -s;
    m[a2][a2] = c;
    m
}

fn mul(a: &Mat, b: &Mat) -> Mat {
    let mut m = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            m[i][j] = (0..3).map(|k| a[i][k] * b[k][j]).sum();
        }
    }
    m
}

fn transpose(a: &Mat) -> Mat {
    let mut m = [[0.0; 3]; 3];
    for i in 0..3 {
        for j in 0..3 {
            m[i][j] = a[j][i];
        }
    }
    m
}

fn identity() -> Mat {
    [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]]
}

/// The frame bias matrix ICRS -> FK5 J2000.
fn icrs_to_fk5() -> Mat {
    let mas = 1.0 / 3.6e6;
    let eta0 = -19.9 * mas;
    let xi0 = 9.1 * mas;
    let da0 = -22.9 * mas;
    mul(&mul(&rot(0, -eta0), &rot(1, xi0)), &rot(2, da0))
}

/// FK5 J2000 -> galactic.
fn fk5_to_galactic() -> Mat {
    mul(
        &mul(
            &rot(2, 180.0 - L_NCP_J2000),
            &rot(1, 90.0 - DELTA_NGP_J2000),
        ),
        &rot(2, ALPHA_NGP_J2000),
    )
}

/// Fukushima-Williams bias-precession matrix F(t) of IAU 2006, t in Julian centuries (TT)
/// from J2000; polynomial coefficients in arcseconds (IERS Conventions 2010, eq. 5.40, and
/// eq. 5.39 for the obliquity epsilon_A).
fn fukushima_williams(t: f64) -> Mat {
    let poly = |c: [f64; 6]| c.iter().rev().fold(0.0, |acc, &k| acc * t + k) / 3600.0;
    let gamb = poly([
        -0.052928,
        10.556378,
        0.4932044,
        -0.00031238,
        -0.000002788,
        0.0000000260,
    ]);
    let phib = poly([
        84381.412819,
        -46.811016,
        0.0511268,
        0.00053289,
        -0.000000440,
        -0.0000000176,
    ]);
    let psib = poly([
        -0.041775,
        5038.481484,
        1.5584175,
        -0.00018522,
        -0.000026452,
        -0.0000000148,
    ]);
    let epsa = poly([
        84381.406,
        -46.836769,
        -0.0001831,
        0.00200340,
        -0.000000576,
        -0.0000000434,
    ]);
    mul(
        &mul(&rot(0, -epsa), &rot(2, -psib)),
        &mul(&rot(0, phib), &rot(2, gamb)),
    )
}

/// Precession matrix from FK5 J2000 to FK5 at a Julian equinox (years).
fn precession_from_j2000(equinox: f64) -> Mat {
    if equinox == 2000.0 {
        return identity();
    }
    let t = (equinox - 2000.0) / 100.0;
    mul(&fukushima_williams(t), &transpose(&fukushima_williams(0.0)))
}

/// Matrix taking a frame's unit vectors to ICRS, when the frame is supported.
fn to_icrs(frame: &SkyFrame) -> Option<Mat> {
    match frame {
        SkyFrame::Icrs => Some(identity()),
        SkyFrame::Fk5 { equinox } if equinox.is_finite() => Some(transpose(&mul(
            &precession_from_j2000(*equinox),
            &icrs_to_fk5(),
        ))),
        SkyFrame::Galactic => Some(transpose(&mul(&fk5_to_galactic(), &icrs_to_fk5()))),
        _ => None,
    }
}

/// Converts a position (degrees) from one frame to another; longitude in [0, 360). `None`
/// when either frame is not among ICRS, FK5 (any Julian equinox) and galactic.
pub fn convert_frame(lon: f64, lat: f64, from: &SkyFrame, to: &SkyFrame) -> Option<(f64, f64)> {
    if !lon.is_finite() || !lat.is_finite() {
        return None;
    }
    let a = to_icrs(from)?;
    let b = transpose(&to_icrs(to)?);
    let m = mul(&b, &a);
    let (sl, cl) = sincosd(lon);
    let (sb, cb) = sincosd(lat);
    let v = [cb * cl, cb * sl, sb];
    let w: Vec<f64> = (0..3)
        .map(|i| (0..3).map(|k| m[i][k] * v[k]).sum())
        .collect();
    let lon2 = norm360(atan2d(w[1], w[0]));
    let lat2 = atan2d(w[2], w[0].hypot(w[1]));
    Some((lon2, lat2))
}

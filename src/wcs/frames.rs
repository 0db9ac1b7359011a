//! Conversions between celestial reference frames: ICRS, FK5, galactic, and from FK4.
//!
//! All conversions are fixed rotations of the unit vector:
//!
//! * ICRS -> FK5 J2000: the frame bias B = R1(-eta0) R2(xi0) R3(da0) with the FK5 pole offsets
//!   eta0 = -19.9 mas, xi0 = +9.1 mas and the equinox offset da0 = -22.9 mas (Mignard &
//!   Froeschle 2000, A&A 354, 732; the rotation adopted by astropy.coordinates). The bias is
//!   included: FK5 J2000 and ICRS differ by up to about 32 mas (31.7 mas by astropy 8.0.2).
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
//! * From FK4 at a Besselian equinox (with the E-terms of aberration, epoch of observation =
//!   equinox): the E-terms removed at that equinox, Newcomb's precession to B1950, then to
//!   FK5 J2000 by the matrix of Standish 1982 (A&A 115, 20; Aoki et al. 1983, A&A 128, 263)
//!   with its correction for the rotation of FK4, or to galactic by the IAU 1958 definition
//!   in B1950 (Blaauw et al. 1960). This is the route astropy.coordinates takes from FK4 to
//!   ICRS and galactic. The constants of these steps (the matrix and its correction, the
//!   precession and E-term coefficients) were written from memory of the published values
//!   and are checked against astropy 8.0.2 to 1e-13 degree at equinoxes B1950 and B1975
//!   (tests/wcs_astropy.rs; changing the constant of aberration in its fourth digit, or a
//!   cubic precession coefficient by 1", fails that check).
//!
//! Here R1, R2, R3 are rotations of the coordinate system about the x, y, z axes:
//! R3(a) = [[cos a, sin a, 0], [-sin a, cos a, 0], [0, 0, 1]], and likewise for x and y.
//!
//! Conversions into FK4, and ecliptic frames, are not made (`None`).

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

fn apply(m: &Mat, v: [f64; 3]) -> [f64; 3] {
    let mut w = [0.0; 3];
    for (i, wi) in w.iter_mut().enumerate() {
        *wi = (0..3).map(|k| m[i][k] * v[k]).sum();
    }
    w
}

/// Julian date (TT) of a Besselian epoch in years (Lieske 1979: B = 1900 + (JD -
/// 2415020.31352) / 365.242198781).
fn besselian_jd(b: f64) -> f64 {
    2415020.31352 + (b - 1900.0) * 365.242198781
}

/// The E-terms of aberration of the FK4 catalogue at a Besselian equinox, as the vector A
/// with A = e k (sin g, -cos g cos eps, -cos g sin eps): the constant of aberration k =
/// 20.4955" (0.0056932 deg), the eccentricity e and the mean longitude of perigee g of the
/// Earth's orbit (Newcomb's expressions in Julian centuries from B1950) and the mean
/// obliquity eps of IAU 1980, as astropy.coordinates applies them.
fn fk4_eterms(equinox: f64) -> [f64; 3] {
    let jd = besselian_jd(equinox);
    let t = (jd - besselian_jd(1950.0)) / 36525.0;
    let e = (-0.000000126 * t - 0.00004193) * t + 0.01673011;
    let g = (((0.012 * t + 1.65) * t + 6190.67) * t + 1015489.951) / 3600.0;
    let t2 = (jd - 2451545.0) / 36525.0;
    let eps = (((0.001813 * t2 - 0.00059) * t2 - 46.815) * t2 + 84381.448) / 3600.0;
    let k = 0.0056932_f64.to_radians();
    let (sg, cg) = sincosd(g);
    let (se, ce) = sincosd(eps);
    [e * k * sg, -e * k * cg * ce, -e * k * cg * se]
}

/// A unit vector of FK4 with its E-terms removed: v - A + (A . v) v, renormalised.
fn remove_eterms(v: [f64; 3], equinox: f64) -> [f64; 3] {
    let a = fk4_eterms(equinox);
    let d = a[0] * v[0] + a[1] * v[1] + a[2] * v[2];
    let w = [
        v[0] - a[0] + d * v[0],
        v[1] - a[1] + d * v[1],
        v[2] - a[2] + d * v[2],
    ];
    let n = (w[0] * w[0] + w[1] * w[1] + w[2] * w[2]).sqrt();
    [w[0] / n, w[1] / n, w[2] / n]
}

/// Newcomb's precession between Besselian epochs, P = R3(-z) R2(theta) R3(-zeta), with the
/// angles as cubic series in the interval from the first epoch, in Besselian millennia from
/// 1850 (the expressions astropy.coordinates applies to FK4).
fn besselian_precession(from: f64, to: f64) -> Mat {
    if from == to {
        return identity();
    }
    let t1 = (from - 1850.0) / 1000.0;
    let dt = (to - from) / 1000.0;
    let cubic = |c1: f64, c2: f64, c3: f64| ((c3 * dt + c2) * dt + c1) * dt / 3600.0;
    let zeta = cubic(
        23035.545 + 139.720 * t1 + 0.060 * t1 * t1,
        30.240 - 0.27 * t1,
        17.995,
    );
    let z = cubic(
        23035.545 + 139.720 * t1 + 0.060 * t1 * t1,
        109.480 + 0.39 * t1,
        18.325,
    );
    let theta = cubic(
        20051.12 - 85.29 * t1 - 0.37 * t1 * t1,
        -42.65 - 0.37 * t1,
        -41.8,
    );
    mul(&mul(&rot(2, -z), &rot(1, theta)), &rot(2, -zeta))
}

/// FK4 without E-terms at equinox B1950 -> FK5 J2000 (Standish 1982; Aoki et al. 1983): the
/// fixed matrix plus its correction for the rotation of FK4, proportional to the epoch of
/// observation (here the equinox, taken as the epoch) in Julian centuries from 1950.
fn fk4_b1950_to_fk5_j2000(epoch: f64) -> Mat {
    const M: Mat = [
        [0.9999256794956877, -0.0111814832204662, -0.0048590038153592],
        [0.0111814832391717, 0.9999374848933135, -0.0000271625947142],
        [0.0048590037723143, -0.0000271702937440, 0.9999881946023742],
    ];
    const CORR: Mat = [
        [-0.0026455262, -1.1539918689, 2.1111346190],
        [1.1540628161, -0.0129042997, 0.0236021478],
        [-2.1112979048, -0.0056024448, 0.0102587734],
    ];
    let jyear = 2000.0 + (besselian_jd(epoch) - 2451545.0) / 365.25;
    let t = (jyear - 1950.0) / 100.0;
    let mut m = M;
    for i in 0..3 {
        for j in 0..3 {
            m[i][j] += CORR[i][j] * 1e-6 * t;
        }
    }
    m
}

/// FK4 (no E-terms, B1950) -> galactic: the IAU 1958 definition (Blaauw et al. 1960), north
/// galactic pole at (192.25, 27.4) deg and the north celestial pole at l = 123 deg.
fn fk4_to_galactic() -> Mat {
    mul(
        &mul(&rot(2, 180.0 - 123.0), &rot(1, 90.0 - 27.4)),
        &rot(2, 192.25),
    )
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
    let (sl, cl) = sincosd(lon);
    let (sb, cb) = sincosd(lat);
    let v = [cb * cl, cb * sl, sb];
    let w = match from {
        SkyFrame::Fk4 { equinox } if equinox.is_finite() => {
            // Without E-terms, at equinox B1950: the IAU 1958 galactic system is defined
            // there; other frames go through FK5 J2000.
            let u = apply(
                &besselian_precession(*equinox, 1950.0),
                remove_eterms(v, *equinox),
            );
            match to {
                SkyFrame::Galactic => apply(&fk4_to_galactic(), u),
                _ => {
                    let icrs = apply(
                        &transpose(&icrs_to_fk5()),
                        apply(&fk4_b1950_to_fk5_j2000(*equinox), u),
                    );
                    apply(&transpose(&to_icrs(to)?), icrs)
                }
            }
        }
        _ => apply(&mul(&transpose(&to_icrs(to)?), &to_icrs(from)?), v),
    };
    let lon2 = norm360(atan2d(w[1], w[0]));
    let lat2 = atan2d(w[2], w[0].hypot(w[1]));
    Some((lon2, lat2))
}

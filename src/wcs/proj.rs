//! Spherical map projections of Calabretta & Greisen 2002 (A&A 395, 1077, "Paper II"), and
//! the HEALPix projection HPX of Calabretta & Roukema 2007 (MNRAS 381, 865): the mapping
//! between native spherical coordinates (phi, theta) and projection-plane coordinates (x, y),
//! all in degrees.
//!
//! Each projection is written from its defining equations in Paper II (section numbers are
//! given next to each one). The domain rules follow the paper: a point with no image (the far
//! hemisphere of SIN, the outside of AIT's ellipse, ...) gives `None`. After every inverse
//! projection the native coordinates must lie in phi in [-180, 180], theta in [-90, 90]
//! (within 1e-12 of the limit, i.e. ~2e-10 degree in longitude, then clamped), as Paper II's
//! native coordinate ranges require.

use super::trig::{D2R, R2D, asind, atan2d, cosd, sind, tand};

/// Radius of the generating sphere in degrees, r0 = 180/pi (Paper II sec. 2.1).
const R0: f64 = R2D;
/// Tolerance (degrees, or the dimensionless quantity tested) for boundary round-off.
const TOL: f64 = 1.0e-13;

/// The projection codes cairn reads, as listed in error messages.
pub const SUPPORTED: &str = "AZP, SZP, TAN, STG, SIN, NCP, ARC, ZPN, ZEA, AIR, CYP, CEA, CAR, \
                             MER, SFL, GLS, PAR, MOL, AIT, COP, COE, COD, COO, BON, PCO, HPX, TSC, QSC";

/// One projection with its parameters resolved.
#[derive(Debug, Clone)]
pub struct Projection {
    /// The three-letter code (NCP and GLS are stored under their Paper II names SIN, SFL).
    pub code: String,
    kind: Kind,
    /// Native longitude and latitude of the fiducial point (phi0, theta0), degrees.
    pub phi0: f64,
    pub theta0: f64,
    /// Offset (x, y) subtracted so that (phi0, theta0) maps to (0, 0), applied only when
    /// requested by a non-zero PVi_0 of the longitude axis (Paper II sec. 2.5, Table 13).
    offset: (f64, f64),
    /// Whether `offset` is in use.
    pub offset_applied: bool,
}

#[derive(Debug, Clone)]
enum Kind {
    /// Zenithal/azimuthal perspective, sec. 5.1.1: mu, gamma.
    Azp {
        mu: f64,
        cg: f64,
        sg: f64,
    },
    /// Slant zenithal perspective, sec. 5.1.2: (Xp, Yp, Zp).
    Szp {
        xp: f64,
        yp: f64,
        zp: f64,
    },
    Tan,
    Stg,
    /// Slant orthographic, sec. 5.1.5: xi, eta.
    Sin {
        xi: f64,
        eta: f64,
    },
    Arc,
    /// Zenithal polynomial, sec. 5.1.7: coefficients, and the largest zenith distance
    /// (radians) with its R (in units of r0) where R(zd) stops increasing.
    Zpn {
        p: Vec<f64>,
        zd_max: f64,
        r_max: f64,
    },
    Zea,
    /// Airy, sec. 5.1.9: the constant ln(cos xi_b)/tan^2(xi_b).
    Air {
        cxi: f64,
    },
    Cyp {
        mu: f64,
        lambda: f64,
    },
    Cea {
        lambda: f64,
    },
    Car,
    Mer,
    Sfl,
    Par,
    Mol,
    Ait,
    /// Conic projections, sec. 5.4: constant C, Y0 and per-kind constants.
    Cop {
        c: f64,
        y0: f64,
        ceta: f64,
        cota: f64,
        theta_a: f64,
    },
    Coe {
        c: f64,
        y0: f64,
        gamma: f64,
        s1s2: f64,
        theta_a: f64,
    },
    Cod {
        c: f64,
        y0: f64,
        theta_a: f64,
    },
    Coo {
        c: f64,
        y0: f64,
        psi: f64,
        theta_a: f64,
    },
    /// Bonne, sec. 5.5.1: theta1 and Y0 (theta1 = 0 is SFL).
    Bon {
        theta1: f64,
        y0: f64,
    },
    Pco,
    /// HEALPix, Calabretta & Roukema 2007 (MNRAS 381, 865): H facets around the equator
    /// (PVi_1, default 4) and K facets in latitude (PVi_2, default 3).
    Hpx {
        h: f64,
        k: f64,
    },
    /// Tangential spherical cube, sec. 5.6.1.
    Tsc,
    /// Quadrilateralized spherical cube (exactly equal-area), sec. 5.6.3.
    Qsc,
}

/// Projection parameters PVi_m of the latitude axis, m = 0..29 (`None` when absent).
pub type Params = [Option<f64>; 30];

impl Projection {
    /// Builds a projection from its code and parameters. `phi0`/`theta0` override the
    /// fiducial point when given (PVi_1, PVi_2 of the longitude axis); `use_offset` (PVi_0
    /// of the longitude axis non-zero) shifts the plane so that the fiducial point is at
    /// (0, 0). Errors are sentences without the keyword context, which the caller adds.
    pub fn new(
        code: &str,
        pv: &Params,
        phi0: Option<f64>,
        theta0: Option<f64>,
        use_offset: bool,
    ) -> Result<Projection, String> {
        let p = |m: usize, d: f64| pv[m].unwrap_or(d);
        let need = |m: usize| {
            pv[m].ok_or_else(|| {
                format!("projection {code} needs parameter PVi_{m} on the latitude axis")
            })
        };
        let (kind, default_theta0, name) = match code {
            "AZP" => {
                let mu = p(1, 0.0);
                let gamma = p(2, 0.0);
                if mu == -1.0 {
                    return Err("AZP parameter mu = PVi_1 must not be -1".into());
                }
                (
                    Kind::Azp {
                        mu,
                        cg: cosd(gamma),
                        sg: sind(gamma),
                    },
                    90.0,
                    "AZP",
                )
            }
            "SZP" => {
                let mu = p(1, 0.0);
                let phic = p(2, 0.0);
                let thetac = p(3, 90.0);
                let xp = -mu * cosd(thetac) * sind(phic);
                let yp = mu * cosd(thetac) * cosd(phic);
                let zp = mu * sind(thetac) + 1.0;
                if zp == 0.0 {
                    return Err(
                        "SZP parameters give a projection point on the sphere's centre plane"
                            .into(),
                    );
                }
                (Kind::Szp { xp, yp, zp }, 90.0, "SZP")
            }
            "TAN" => (Kind::Tan, 90.0, "TAN"),
            "STG" => (Kind::Stg, 90.0, "STG"),
            "SIN" => (
                Kind::Sin {
                    xi: p(1, 0.0),
                    eta: p(2, 0.0),
                },
                90.0,
                "SIN",
            ),
            "ARC" => (Kind::Arc, 90.0, "ARC"),
            "ZPN" => {
                let last = pv
                    .iter()
                    .rposition(|v| v.is_some_and(|v| v != 0.0))
                    .unwrap_or(0);
                let coeffs: Vec<f64> = (0..=last).map(|m| p(m, 0.0)).collect();
                let (zd_max, r_max) = zpn_limit(&coeffs)?;
                (
                    Kind::Zpn {
                        p: coeffs,
                        zd_max,
                        r_max,
                    },
                    90.0,
                    "ZPN",
                )
            }
            "ZEA" => (Kind::Zea, 90.0, "ZEA"),
            "AIR" => {
                let theta_b = p(1, 90.0);
                let xib = (90.0 - theta_b) / 2.0;
                let cxi = if xib.abs() < 1e-12 {
                    -0.5
                } else if xib < 90.0 {
                    cosd(xib).ln() / (tand(xib) * tand(xib))
                } else {
                    return Err("AIR parameter theta_b = PVi_1 must exceed -90".into());
                };
                (Kind::Air { cxi }, 90.0, "AIR")
            }
            "CYP" => {
                let mu = p(1, 1.0);
                let lambda = p(2, 1.0);
                if lambda == 0.0 || mu == -lambda {
                    return Err("CYP parameters need lambda != 0 and mu != -lambda".into());
                }
                (Kind::Cyp { mu, lambda }, 0.0, "CYP")
            }
            "CEA" => {
                let lambda = p(1, 1.0);
                if lambda <= 0.0 || lambda > 1.0 {
                    return Err("CEA parameter lambda = PVi_1 must lie in (0, 1]".into());
                }
                (Kind::Cea { lambda }, 0.0, "CEA")
            }
            "CAR" => (Kind::Car, 0.0, "CAR"),
            "MER" => (Kind::Mer, 0.0, "MER"),
            "SFL" | "GLS" => (Kind::Sfl, 0.0, "SFL"),
            "PAR" => (Kind::Par, 0.0, "PAR"),
            "MOL" => (Kind::Mol, 0.0, "MOL"),
            "AIT" => (Kind::Ait, 0.0, "AIT"),
            "COP" | "COE" | "COD" | "COO" => {
                let theta_a = need(1)?;
                let eta = p(2, 0.0);
                if theta_a == 0.0 || theta_a.abs() > 90.0 {
                    return Err(format!(
                        "{code} parameter theta_a = PVi_1 must be non-zero and within [-90, 90]"
                    ));
                }
                let kind = match code {
                    "COP" => {
                        let c = sind(theta_a);
                        let ceta = cosd(eta);
                        let cota = 1.0 / tand(theta_a);
                        Kind::Cop {
                            c,
                            y0: R0 * ceta * cota,
                            ceta,
                            cota,
                            theta_a,
                        }
                    }
                    "COE" => {
                        let s1 = sind(theta_a - eta);
                        let s2 = sind(theta_a + eta);
                        let gamma = s1 + s2;
                        if gamma == 0.0 {
                            return Err("COE parameters give sin(theta1) + sin(theta2) = 0".into());
                        }
                        let s1s2 = s1 * s2;
                        let y0 = 2.0 * R0 / gamma * (1.0 + s1s2 - gamma * sind(theta_a)).sqrt();
                        Kind::Coe {
                            c: gamma / 2.0,
                            y0,
                            gamma,
                            s1s2,
                            theta_a,
                        }
                    }
                    "COD" => {
                        let (c, y0) = if eta == 0.0 {
                            (sind(theta_a), R0 / tand(theta_a))
                        } else {
                            (
                                R0 * sind(theta_a) * sind(eta) / eta,
                                eta / tand(eta) / tand(theta_a),
                            )
                        };
                        Kind::Cod { c, y0, theta_a }
                    }
                    _ => {
                        let th1 = theta_a - eta;
                        let th2 = theta_a + eta;
                        let tan1 = tand((90.0 - th1) / 2.0);
                        let cos1 = cosd(th1);
                        let c = if eta == 0.0 {
                            sind(th1)
                        } else {
                            (cosd(th2) / cos1).ln() / (tand((90.0 - th2) / 2.0) / tan1).ln()
                        };
                        if c == 0.0 || !c.is_finite() {
                            return Err("COO parameters give a zero cone constant".into());
                        }
                        let psi = R0 * cos1 / (c * tan1.powf(c));
                        let y0 = psi * tand((90.0 - theta_a) / 2.0).powf(c);
                        Kind::Coo {
                            c,
                            y0,
                            psi,
                            theta_a,
                        }
                    }
                };
                let name = match code {
                    "COP" => "COP",
                    "COE" => "COE",
                    "COD" => "COD",
                    _ => "COO",
                };
                return Projection::finish(name, kind, theta_a, phi0, theta0, use_offset);
            }
            "BON" => {
                let theta1 = need(1)?;
                if theta1.abs() > 90.0 {
                    return Err("BON parameter theta1 = PVi_1 must lie within [-90, 90]".into());
                }
                let y0 = if theta1 == 0.0 {
                    0.0
                } else {
                    R0 / tand(theta1) + theta1
                };
                (Kind::Bon { theta1, y0 }, 0.0, "BON")
            }
            "PCO" => (Kind::Pco, 0.0, "PCO"),
            "HPX" => {
                let h = p(1, 4.0);
                let k = p(2, 3.0);
                if !(h >= 1.0 && h.fract() == 0.0 && k >= 1.0 && k.fract() == 0.0) {
                    return Err(format!(
                        "HPX parameters H = PVi_1 and K = PVi_2 must be positive whole numbers, got {h} and {k}"
                    ));
                }
                (Kind::Hpx { h, k }, 0.0, "HPX")
            }
            "TSC" => (Kind::Tsc, 0.0, "TSC"),
            "QSC" => (Kind::Qsc, 0.0, "QSC"),
            _ => return Err(format!("unknown projection code '{code}'")),
        };
        Projection::finish(name, kind, default_theta0, phi0, theta0, use_offset)
    }

    fn finish(
        name: &str,
        kind: Kind,
        default_theta0: f64,
        phi0: Option<f64>,
        theta0: Option<f64>,
        use_offset: bool,
    ) -> Result<Projection, String> {
        let mut proj = Projection {
            code: name.to_string(),
            kind,
            phi0: phi0.unwrap_or(0.0),
            theta0: theta0.unwrap_or(default_theta0),
            offset: (0.0, 0.0),
            offset_applied: false,
        };
        if use_offset && (proj.phi0 != 0.0 || proj.theta0 != default_theta0) {
            proj.offset_applied = true;
            proj.offset = proj
                .raw_s2x(proj.phi0, proj.theta0)
                .ok_or("the fiducial point (PVi_1, PVi_2 of the longitude axis) has no image in this projection")?;
        }
        Ok(proj)
    }

    /// Projection plane (x, y) -> native (phi, theta), degrees.
    pub fn x2s(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let (phi, theta) = self.raw_x2s(x + self.offset.0, y + self.offset.1)?;
        if !phi.is_finite() || !theta.is_finite() {
            return None;
        }
        let phi = bound(phi, 180.0)?;
        let theta = bound(theta, 90.0)?;
        Some((phi, theta))
    }

    /// Native (phi, theta) -> projection plane (x, y), degrees.
    pub fn s2x(&self, phi: f64, theta: f64) -> Option<(f64, f64)> {
        let (x, y) = self.raw_s2x(phi, theta)?;
        if !x.is_finite() || !y.is_finite() {
            return None;
        }
        Some((x - self.offset.0, y - self.offset.1))
    }

    fn raw_x2s(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        match &self.kind {
            Kind::Azp { mu, cg, sg } => {
                let yc = y * cg;
                let r = x.hypot(yc);
                if r == 0.0 {
                    return Some((0.0, 90.0));
                }
                let phi = atan2d(x, -yc);
                // Paper II eqs. 22-23.
                let rho = r / (R0 * (mu + 1.0) + y * sg);
                let mut t = rho * mu / (rho * rho + 1.0).sqrt();
                if t.abs() > 1.0 {
                    if t.abs() > 1.0 + TOL {
                        return None;
                    }
                    t = t.signum();
                }
                let psi = atan2d(1.0, rho);
                let omega = asind(t);
                let mut a = psi - omega;
                let mut b = psi + omega + 180.0;
                if a > 90.0 {
                    a -= 360.0;
                }
                if b > 90.0 {
                    b -= 360.0;
                }
                Some((phi, a.max(b)))
            }
            Kind::Szp { xp, yp, zp } => {
                slant_x2s(x / R0, y / R0, (x / R0 - xp) / zp, (y / R0 - yp) / zp)
            }
            Kind::Sin { xi, eta } => slant_x2s(x / R0, y / R0, *xi, *eta),
            Kind::Tan => zenithal(x, y, |r| Some(atan2d(R0, r))),
            Kind::Stg => zenithal(x, y, |r| Some(90.0 - 2.0 * atan2d(r, 2.0 * R0))),
            Kind::Arc => zenithal(x, y, |r| Some(90.0 - r)),
            Kind::Zea => zenithal(x, y, |r| {
                let mut w = r / (2.0 * R0);
                if w > 1.0 {
                    if w > 1.0 + TOL {
                        return None;
                    }
                    w = 1.0;
                }
                Some(90.0 - 2.0 * asind(w))
            }),
            Kind::Zpn { p, zd_max, r_max } => zenithal(x, y, |r| {
                let r = r / R0;
                let zd = if r > *r_max {
                    if r > r_max + TOL {
                        return None;
                    }
                    *zd_max
                } else if r < p[0] {
                    if r < p[0] - TOL {
                        return None;
                    }
                    0.0
                } else {
                    bisect(|z| poly(p, z) - r, 0.0, *zd_max)
                };
                Some(90.0 - zd * R2D)
            }),
            Kind::Air { cxi } => zenithal(x, y, |r| {
                if r == 0.0 {
                    return Some(90.0);
                }
                let target = r / (2.0 * R0);
                // R(xi) increases monotonically from 0 at xi = 0 (Paper II eq. 67).
                let f = |xi: f64| air_r(xi, *cxi) - target;
                let mut hi = 45.0;
                while f(hi) < 0.0 {
                    hi = (hi + 90.0) / 2.0;
                    if hi > 90.0 - 1e-10 {
                        return None;
                    }
                }
                let xi = bisect(f, 0.0, hi);
                Some(90.0 - 2.0 * xi)
            }),
            Kind::Cyp { mu, lambda } => {
                let eta = y / (R0 * (mu + lambda));
                let theta = atan2d(eta, 1.0) + asind_checked(eta * mu / (eta * eta + 1.0).sqrt())?;
                Some((x / lambda, theta))
            }
            Kind::Cea { lambda } => {
                let s = y * lambda / R0;
                Some((x, asind_checked(s)?))
            }
            Kind::Car => Some((x, y)),
            Kind::Mer => Some((x, 2.0 * atan2d((y * D2R).exp(), 1.0) - 90.0)),
            Kind::Sfl => sfl_x2s(x, y),
            Kind::Par => {
                let s = y / 180.0;
                if s.abs() > 1.0 + TOL {
                    return None;
                }
                let s = s.clamp(-1.0, 1.0);
                let theta = 3.0 * asind(s);
                let d = 1.0 - 4.0 * s * s;
                let phi = if d == 0.0 {
                    if x.abs() > TOL {
                        return None;
                    }
                    0.0
                } else {
                    x / d
                };
                Some((phi, theta))
            }
            Kind::Mol => {
                let s = y / (std::f64::consts::SQRT_2 * R0);
                if s.abs() > 1.0 + TOL {
                    return None;
                }
                let s = s.clamp(-1.0, 1.0);
                let cg = (1.0 - s * s).sqrt();
                let phi = if cg < 1e-13 {
                    if x.abs() > 1e-10 {
                        return None;
                    }
                    0.0
                } else {
                    std::f64::consts::PI * x / (2.0 * std::f64::consts::SQRT_2 * cg)
                };
                let g = s.asin();
                let z = (2.0 * g + (2.0 * g).sin()) / std::f64::consts::PI;
                Some((phi, asind_checked(z)?))
            }
            Kind::Ait => {
                let u = x / (4.0 * R0);
                let v = y / (2.0 * R0);
                let mut s = 1.0 - u * u - v * v;
                if s < 0.5 {
                    if s < 0.5 - TOL {
                        return None;
                    }
                    s = 0.5;
                }
                let z = s.sqrt();
                let phi = 2.0 * atan2d(z * x / (2.0 * R0), 2.0 * z * z - 1.0);
                Some((phi, asind_checked(z * y / R0)?))
            }
            Kind::Cop {
                c,
                y0,
                ceta,
                cota,
                theta_a,
            } => {
                let (r, cphi) = conic_polar(x, y, *y0, *theta_a);
                let theta = theta_a + atand(cota - r / (R0 * ceta));
                Some((cphi / c, theta))
            }
            Kind::Coe {
                c,
                y0,
                gamma,
                s1s2,
                theta_a,
            } => {
                let (r, cphi) = conic_polar(x, y, *y0, *theta_a);
                let w = r * gamma / (2.0 * R0);
                let s = (1.0 + s1s2 - w * w) / gamma;
                Some((cphi / c, asind_checked(s)?))
            }
            Kind::Cod { c, y0, theta_a } => {
                let (r, cphi) = conic_polar(x, y, *y0, *theta_a);
                Some((cphi / c, y0 + theta_a - r))
            }
            Kind::Coo {
                c,
                y0,
                psi,
                theta_a,
            } => {
                let (r, cphi) = conic_polar(x, y, *y0, *theta_a);
                let theta = if r == 0.0 {
                    if *c < 0.0 { -90.0 } else { 90.0 }
                } else {
                    90.0 - 2.0 * atand((r / psi).powf(1.0 / c))
                };
                Some((cphi / c, theta))
            }
            Kind::Bon { theta1, y0 } => {
                if *theta1 == 0.0 {
                    return sfl_x2s(x, y);
                }
                let dy = y0 - y;
                let mut r = x.hypot(dy);
                if *theta1 < 0.0 {
                    r = -r;
                }
                let a = if r == 0.0 { 0.0 } else { (x / r).atan2(dy / r) };
                let theta = y0 - r;
                let ct = cosd(theta);
                let phi = if ct == 0.0 { 0.0 } else { a * r / ct };
                Some((phi, theta))
            }
            Kind::Hpx { h, k } => {
                // Equatorial zone: cylindrical equal-area; polar zones: K-dependent facets
                // (Calabretta & Roukema 2007 sec. 3 and 6).
                let y_x = 90.0 * (k - 1.0) / h;
                if y.abs() <= y_x + TOL {
                    let s = y * h / (90.0 * k);
                    return Some((x, asind_checked(s)?));
                }
                let sigma = (k + 1.0) / 2.0 - y.abs() * h / 180.0;
                if sigma < -TOL {
                    return None;
                }
                let sigma = sigma.max(0.0);
                let xc = hpx_facet_centre(x, *h, *k, y > 0.0);
                let dx = x - xc;
                if dx.abs() > 180.0 / h * sigma + TOL {
                    return None;
                }
                let phi = if sigma < 1e-13 { xc } else { xc + dx / sigma };
                let t = (1.0 - sigma * sigma / k).clamp(-1.0, 1.0);
                Some((phi, asind(t).copysign(y)))
            }
            Kind::Tsc => {
                // The face's gnomonic coordinates back to direction cosines (Paper II sec.
                // 5.6.1).
                let (face, chi, psi) = cube_plane_face(x, y)?;
                let zeta = 1.0 / (1.0 + chi * chi + psi * psi).sqrt();
                let (l, m, n) = cube_face_inverse(face, chi * zeta, psi * zeta, zeta);
                Some((atan2d(m, l), asind_checked(n)?))
            }
            Kind::Qsc => {
                // Paper II sec. 5.6.3: omega from the ratio of the face coordinates, then zeta,
                // then xi and eta with xi^2 + eta^2 = 1 - zeta^2.
                let (face, u, v) = cube_plane_face(x, y)?;
                let (xi, eta, zeta) = if u == 0.0 && v == 0.0 {
                    (0.0, 0.0, 1.0)
                } else {
                    let (big, small) = if u.abs() > v.abs() { (u, v) } else { (v, u) };
                    let t = 15.0 * small / big;
                    let omega = sind(t) / (cosd(t) - std::f64::consts::FRAC_1_SQRT_2);
                    let zeta = 1.0 - big * big * (1.0 - 1.0 / (2.0 + omega * omega).sqrt());
                    if zeta < -1.0 - TOL {
                        return None;
                    }
                    let zeta = zeta.clamp(-1.0, 1.0);
                    let a = ((1.0 - zeta * zeta) / (1.0 + omega * omega))
                        .sqrt()
                        .copysign(big);
                    if u.abs() > v.abs() {
                        (a, omega * a, zeta)
                    } else {
                        (omega * a, a, zeta)
                    }
                };
                let (l, m, n) = cube_face_inverse(face, xi, eta, zeta);
                Some((atan2d(m, l), asind_checked(n)?))
            }
            Kind::Pco => {
                if y.abs() < 1e-12 {
                    return Some((x, 0.0));
                }
                if (y.abs() - 90.0).abs() < 1e-12 {
                    return Some((0.0, 90.0f64.copysign(y)));
                }
                // Paper II eq. 134 rearranged: x^2 + (y - theta)^2 - 2 (y - theta) r0 cot theta = 0
                // has one root with theta between 0 and +-90 (same sign as y).
                let f = |t: f64| {
                    let d = y - t;
                    x * x + d * (d - 2.0 * R0 / tand(t))
                };
                let end = 90.0f64.copysign(y);
                if f(end) < 0.0 {
                    return None;
                }
                let theta = bisect(f, end * 1e-12, end);
                let tt = tand(theta);
                let xp = R0 - (y - theta) * tt;
                let yp = x * tt;
                let phi = if xp == 0.0 && yp == 0.0 {
                    0.0
                } else {
                    atan2d(yp, xp) / sind(theta)
                };
                Some((phi, theta))
            }
        }
    }

    fn raw_s2x(&self, phi: f64, theta: f64) -> Option<(f64, f64)> {
        let (sp, cp) = (sind(phi), cosd(phi));
        let (st, ct) = (sind(theta), cosd(theta));
        let polar = |r: f64| (r * sp, -r * cp);
        match &self.kind {
            Kind::Azp { mu, cg, sg } => {
                // Paper II eq. 19-20.
                let d = (mu + st) + ct * cp * sg / cg;
                if d == 0.0 {
                    return None;
                }
                let r = R0 * (mu + 1.0) * ct / d;
                // Points hidden behind the horizon of the projection point (Paper II
                // eq. 24), then points where the projection diverges for a tilted plane.
                let theta_x = if mu.abs() > 1.0 {
                    asind(-1.0 / mu)
                } else {
                    -90.0
                };
                if theta < theta_x {
                    return None;
                }
                let s = sg / cg * cp;
                let t = mu / (1.0 + s * s).sqrt();
                if t.abs() <= 1.0 {
                    let a0 = atand(-s);
                    let t = asind(t);
                    let mut a = a0 - t;
                    let mut b = a0 + t + 180.0;
                    if a > 90.0 {
                        a -= 360.0;
                    }
                    if b > 90.0 {
                        b -= 360.0;
                    }
                    if theta < a.max(b) {
                        return None;
                    }
                }
                Some((r * sp, -r * cp / cg))
            }
            Kind::Szp { xp, yp, zp } => {
                // Paper II eq. 26.
                let z = 1.0 - st;
                let d = zp - z;
                if d == 0.0 {
                    return None;
                }
                let x = R0 * (zp * ct * sp - xp * z) / d;
                let y = -R0 * (zp * ct * cp + yp * z) / d;
                Some((x, y))
            }
            Kind::Tan => {
                if st <= 0.0 {
                    return None;
                }
                Some(polar(R0 * ct / st))
            }
            Kind::Stg => {
                let d = 1.0 + st;
                if d == 0.0 {
                    return None;
                }
                Some(polar(2.0 * R0 * ct / d))
            }
            Kind::Sin { xi, eta } => {
                // Paper II eq. 58; the visible hemisphere is theta > -atan(xi sin phi - eta cos phi).
                let lim = -atand(xi * sp - eta * cp);
                if theta < lim {
                    return None;
                }
                let z = 1.0 - st;
                Some((R0 * (ct * sp + xi * z), -R0 * (ct * cp - eta * z)))
            }
            Kind::Arc => Some(polar(90.0 - theta)),
            Kind::Zpn { p, zd_max, .. } => {
                let zd = (90.0 - theta) * D2R;
                if zd > *zd_max + 1e-13 {
                    return None;
                }
                Some(polar(R0 * poly(p, zd)))
            }
            Kind::Zea => Some(polar(2.0 * R0 * sind((90.0 - theta) / 2.0))),
            Kind::Air { cxi } => {
                if theta <= -90.0 {
                    return None;
                }
                Some(polar(2.0 * R0 * air_r((90.0 - theta) / 2.0, *cxi)))
            }
            Kind::Cyp { mu, lambda } => {
                let d = mu + ct;
                if d == 0.0 {
                    return None;
                }
                Some((lambda * phi, R0 * (mu + lambda) * st / d))
            }
            Kind::Cea { lambda } => Some((phi, R0 * st / lambda)),
            Kind::Car => Some((phi, theta)),
            Kind::Mer => {
                if theta.abs() >= 90.0 {
                    return None;
                }
                Some((phi, R0 * tand((90.0 + theta) / 2.0).ln()))
            }
            Kind::Sfl => Some((phi * ct, theta)),
            Kind::Par => {
                let s = sind(theta / 3.0);
                Some((phi * (1.0 - 4.0 * s * s), 180.0 * s))
            }
            Kind::Mol => {
                // Solve pi sin(theta) = 2 gamma + sin(2 gamma) for u = 2 gamma (monotonic).
                let target = std::f64::consts::PI * st;
                let u = if theta.abs() == 90.0 {
                    std::f64::consts::PI.copysign(theta)
                } else {
                    bisect(
                        |u| u + u.sin() - target,
                        -std::f64::consts::PI,
                        std::f64::consts::PI,
                    )
                };
                let g = u / 2.0;
                Some((
                    2.0 * std::f64::consts::SQRT_2 / std::f64::consts::PI * phi * g.cos(),
                    std::f64::consts::SQRT_2 * R0 * g.sin(),
                ))
            }
            Kind::Ait => {
                let (sh, ch) = (sind(phi / 2.0), cosd(phi / 2.0));
                let g = R0 * (2.0 / (1.0 + ct * ch)).sqrt();
                Some((2.0 * g * ct * sh, g * st))
            }
            Kind::Cop {
                c,
                y0,
                ceta,
                cota,
                theta_a,
            } => {
                let t = theta - theta_a;
                let ctt = cosd(t);
                if ctt == 0.0 {
                    return None;
                }
                let r = R0 * ceta * (cota - sind(t) / ctt);
                if r * c < 0.0 {
                    return None;
                }
                Some(conic_xy(r, c * phi, *y0))
            }
            Kind::Coe {
                c, y0, gamma, s1s2, ..
            } => {
                let r = 2.0 * R0 / gamma * (1.0 + s1s2 - gamma * st).sqrt();
                Some(conic_xy(r, c * phi, *y0))
            }
            Kind::Cod { c, y0, theta_a } => Some(conic_xy(y0 + theta_a - theta, c * phi, *y0)),
            Kind::Coo { c, y0, psi, .. } => {
                let r = if theta == -90.0 {
                    if *c >= 0.0 {
                        return None;
                    }
                    0.0
                } else {
                    psi * tand((90.0 - theta) / 2.0).powf(*c)
                };
                Some(conic_xy(r, c * phi, *y0))
            }
            Kind::Bon { theta1, y0 } => {
                if *theta1 == 0.0 {
                    return Some((phi * ct, theta));
                }
                let r = y0 - theta;
                let a = if r == 0.0 { 0.0 } else { phi * ct / r };
                Some((r * a.sin(), y0 - r * a.cos()))
            }
            Kind::Hpx { h, k } => {
                let theta_x = asind((k - 1.0) / k);
                if theta.abs() <= theta_x {
                    return Some((phi, 90.0 * k / h * st));
                }
                let sigma = (k * (1.0 - st.abs())).sqrt();
                let phic = hpx_facet_centre(phi, *h, *k, theta > 0.0);
                let y = 180.0 / h * ((k + 1.0) / 2.0 - sigma);
                Some((phic + (phi - phic) * sigma, y.copysign(theta)))
            }
            Kind::Tsc => {
                let (xi, eta, zeta, xc, yc) = cube_face(cp * ct, sp * ct, st);
                Some((45.0 * (xc + xi / zeta), 45.0 * (yc + eta / zeta)))
            }
            Kind::Qsc => {
                let (xi, eta, zeta, xc, yc) = cube_face(cp * ct, sp * ct, st);
                if xi == 0.0 && eta == 0.0 {
                    return Some((45.0 * xc, 45.0 * yc));
                }
                // Paper II sec. 5.6.3: the larger of |xi| and |eta| sets the radial coordinate,
                // the ratio omega of the smaller to it the other.
                let (big, small) = if xi.abs() > eta.abs() {
                    (xi, eta)
                } else {
                    (eta, xi)
                };
                let omega = small / big;
                let r = ((1.0 - zeta) / (1.0 - 1.0 / (2.0 + omega * omega).sqrt()))
                    .max(0.0)
                    .sqrt()
                    .copysign(big);
                let w =
                    r / 15.0 * (atand(omega) - asind(omega / (2.0 * (1.0 + omega * omega)).sqrt()));
                let (u, v) = if xi.abs() > eta.abs() { (r, w) } else { (w, r) };
                Some((45.0 * (xc + u), 45.0 * (yc + v)))
            }
            Kind::Pco => {
                if theta == 0.0 {
                    return Some((phi, 0.0));
                }
                let e = phi * st; // degrees
                let cot = ct / st;
                let half = sind(e / 2.0);
                Some((R0 * cot * sind(e), theta + R0 * cot * 2.0 * half * half))
            }
        }
    }
}

fn atand(x: f64) -> f64 {
    x.atan() * R2D
}

fn asind_checked(s: f64) -> Option<f64> {
    if s.abs() > 1.0 {
        if s.abs() > 1.0 + TOL {
            return None;
        }
        return Some(90.0f64.copysign(s));
    }
    Some(asind(s))
}

/// Rejects values beyond +-limit by more than 1e-12 of the limit, clamps the rest.
fn bound(v: f64, limit: f64) -> Option<f64> {
    if v.abs() > limit {
        if v.abs() > limit * (1.0 + 1e-12) {
            return None;
        }
        return Some(limit.copysign(v));
    }
    Some(v)
}

/// The longitude (or plane x) of the centre of the HPX polar facet holding `lon`, in the
/// northern or southern polar zone (Calabretta & Roukema 2007): with odd K, or in the north,
/// the facets are centred between the equatorial ones' edges, otherwise shifted by half a
/// facet.
fn hpx_facet_centre(lon: f64, h: f64, k: f64, north: bool) -> f64 {
    let omega = if k % 2.0 == 1.0 || north { 1.0 } else { 0.0 };
    -180.0 + (2.0 * ((lon + 180.0) * h / 360.0 + (1.0 - omega) / 2.0).floor() + omega) * 180.0 / h
}

/// The quad-cube face of a direction (l, m, n) (Paper II sec. 5.6, Table 10): the largest of
/// n, l, m, -l, -m, -n picks faces 0 to 5 (the first on ties); returns the face's
/// coordinates (xi, eta, zeta) and its centre in units of 45 degrees.
fn cube_face(l: f64, m: f64, n: f64) -> (f64, f64, f64, f64, f64) {
    let c = [n, l, m, -l, -m, -n];
    let mut face = 0;
    for (i, &v) in c.iter().enumerate() {
        if v > c[face] {
            face = i;
        }
    }
    match face {
        0 => (m, -l, n, 0.0, 2.0),
        1 => (m, n, l, 0.0, 0.0),
        2 => (-l, n, m, 2.0, 0.0),
        3 => (-m, n, -l, 4.0, 0.0),
        4 => (l, n, -m, 6.0, 0.0),
        _ => (m, l, -n, 0.0, -2.0),
    }
}

/// The quad-cube face of a plane position (faces 1 to 4 side by side along x from -45
/// degrees, 0 above and 5 below face 1; x below -45 continues from 315) and the position
/// on the face in units of 45 degrees from its centre; `None` in the plane's empty parts.
fn cube_plane_face(x: f64, y: f64) -> Option<(u8, f64, f64)> {
    let (mut xf, yf) = (x / 45.0, y / 45.0);
    if xf.abs() <= 1.0 + TOL {
        if yf.abs() > 3.0 + TOL {
            return None;
        }
    } else if xf.abs() > 7.0 + TOL || yf.abs() > 1.0 + TOL {
        return None;
    }
    if xf < -1.0 {
        xf += 8.0;
    }
    let (face, xc, yc) = if yf > 1.0 {
        (0, 0.0, 2.0)
    } else if yf < -1.0 {
        (5, 0.0, -2.0)
    } else if xf >= 5.0 {
        (4, 6.0, 0.0)
    } else if xf >= 3.0 {
        (3, 4.0, 0.0)
    } else if xf > 1.0 {
        (2, 2.0, 0.0)
    } else {
        (1, 0.0, 0.0)
    };
    Some((face, xf - xc, yf - yc))
}

/// Direction cosines (l, m, n) from a face's (xi, eta, zeta), the inverse of [`cube_face`].
fn cube_face_inverse(face: u8, xi: f64, eta: f64, zeta: f64) -> (f64, f64, f64) {
    match face {
        0 => (-eta, xi, zeta),
        1 => (zeta, xi, eta),
        2 => (-xi, zeta, eta),
        3 => (-zeta, -xi, eta),
        4 => (xi, -zeta, eta),
        _ => (eta, xi, -zeta),
    }
}

/// Zenithal inverse: phi = atan2(x, -y), theta from R (Paper II eqs. 14-15).
fn zenithal(x: f64, y: f64, theta_of_r: impl Fn(f64) -> Option<f64>) -> Option<(f64, f64)> {
    let r = x.hypot(y);
    let phi = if r == 0.0 { 0.0 } else { atan2d(x, -y) };
    Some((phi, theta_of_r(r)?))
}

fn sfl_x2s(x: f64, y: f64) -> Option<(f64, f64)> {
    let c = cosd(y);
    let phi = if c == 0.0 {
        if x.abs() > TOL {
            return None;
        }
        0.0
    } else {
        x / c
    };
    Some((phi, y))
}

/// Inverse of the slant orthographic family (SIN with xi, eta; SZP with its projection
/// point): X = cos(theta) sin(phi) + x1 z, Y = -cos(theta) cos(phi) + y1 z with z =
/// 1 - sin(theta), all in units of r0. Eliminating phi gives (t + 1) z^2 - 2 (1 + xy) z +
/// r^2 = 0 with t = x1^2 + y1^2, xy = X x1 + Y y1; the root with the larger sin(theta) is
/// taken (Paper II sec. 5.1.5), in the cancellation-free form z = r^2 / ((1+xy) + sqrt(D)).
fn slant_x2s(xr: f64, yr: f64, x1: f64, y1: f64) -> Option<(f64, f64)> {
    let r2 = xr * xr + yr * yr;
    let t = x1 * x1 + y1 * y1;
    let b = 1.0 + xr * x1 + yr * y1;
    let mut d = b * b - (t + 1.0) * r2;
    if d < 0.0 {
        if d < -TOL {
            return None;
        }
        d = 0.0;
    }
    let den = b + d.sqrt();
    let z = if r2 == 0.0 {
        0.0
    } else if den <= 0.0 {
        return None;
    } else {
        r2 / den
    };
    if z > 2.0 + TOL {
        return None;
    }
    let z = z.min(2.0);
    let theta = atan2d(1.0 - z, (z * (2.0 - z)).max(0.0).sqrt());
    let sx = xr - x1 * z;
    let cy = -(yr - y1 * z);
    let phi = if sx == 0.0 && cy == 0.0 {
        0.0
    } else {
        atan2d(sx, cy)
    };
    Some((phi, theta))
}

/// Polar coordinates of a conic projection's plane: R with the sign of theta_a, and
/// C phi = atan2(x / R, (Y0 - y) / R) in degrees (Paper II eqs. 95-96).
fn conic_polar(x: f64, y: f64, y0: f64, theta_a: f64) -> (f64, f64) {
    let dy = y0 - y;
    let mut r = x.hypot(dy);
    if theta_a < 0.0 {
        r = -r;
    }
    let a = if r == 0.0 { 0.0 } else { atan2d(x / r, dy / r) };
    (r, a)
}

fn conic_xy(r: f64, cphi: f64, y0: f64) -> (f64, f64) {
    (r * sind(cphi), y0 - r * cosd(cphi))
}

/// Airy's R / (2 r0) as a function of xi = (90 - theta)/2 in degrees (Paper II eq. 67).
fn air_r(xi: f64, cxi: f64) -> f64 {
    if xi == 0.0 {
        return 0.0;
    }
    let t = tand(xi);
    // ln(cos xi) = ln(1 - 2 sin^2(xi/2)), exact to rounding also for tiny xi.
    let h = sind(xi / 2.0);
    let ln_cos = (-2.0 * h * h).ln_1p();
    -(ln_cos / t + cxi * t)
}

fn poly(p: &[f64], z: f64) -> f64 {
    p.iter().rev().fold(0.0, |acc, &c| acc * z + c)
}

fn dpoly(p: &[f64], z: f64) -> f64 {
    p.iter()
        .enumerate()
        .skip(1)
        .rev()
        .fold(0.0, |acc, (m, &c)| acc * z + m as f64 * c)
}

/// The zenith distance (radians) where ZPN's R(zd) first stops increasing, and R there
/// (Paper II sec. 5.1.7: the projection is only invertible up to that point).
fn zpn_limit(p: &[f64]) -> Result<(f64, f64), String> {
    if p.len() < 2 {
        return Err("ZPN needs a non-zero PVi_1 or higher coefficient".into());
    }
    if p.len() == 2 {
        if p[1] <= 0.0 {
            return Err("ZPN coefficient PVi_1 must be positive".into());
        }
        return Ok((std::f64::consts::PI, poly(p, std::f64::consts::PI)));
    }
    if p[1] <= 0.0 {
        return Err("ZPN coefficient PVi_1 must be positive".into());
    }
    let mut z1 = 0.0;
    for j in 1..=180 {
        let z2 = j as f64 * D2R;
        if dpoly(p, z2) <= 0.0 {
            let zd = bisect(|z| -dpoly(p, z), z1, z2);
            return Ok((zd, poly(p, zd)));
        }
        z1 = z2;
    }
    Ok((std::f64::consts::PI, poly(p, std::f64::consts::PI)))
}

/// Root of an increasing-through-zero function on [a, b] by bisection to full precision;
/// f(a) <= 0 <= f(b) is assumed (either order of signs is accepted).
fn bisect(f: impl Fn(f64) -> f64, a: f64, b: f64) -> f64 {
    let (mut lo, mut hi) = (a, b);
    let flo = f(lo);
    if flo == 0.0 {
        return lo;
    }
    let lo_neg = flo < 0.0;
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid == lo || mid == hi {
            break;
        }
        let fm = f(mid);
        if fm == 0.0 {
            return mid;
        }
        if (fm < 0.0) == lo_neg {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

//! The SIP distortion convention (Shupe et al. 2005, "The SIP Convention for Representing
//! Distortion in FITS Image Headers", ASP Conf. Ser. 347, 491): polynomial corrections in
//! pixel space applied before the linear transformation, flagged by a `-SIP` suffix on both
//! CTYPEs (`RA---TAN-SIP`).
//!
//! With u, v the pixel offsets from CRPIX along axes 1 and 2 (FITS one-based pixels), the
//! intermediate world coordinates are CD (u + f(u, v), v + g(u, v)), where
//! f = sum A_p_q u^p v^q and g = sum B_p_q u^p v^q over p + q <= A_ORDER (B_ORDER). The
//! optional AP_p_q and BP_p_q give an approximate inverse, U = u + sum AP_p_q u^p v^q for
//! the undistorted offsets; here it only starts a Newton iteration that inverts f and g to
//! round-off, so positions go back to pixels exactly even where the stored inverse is poor.

use super::WcsError;
use crate::header::{Card, Header, Value};

/// Largest polynomial order read (the convention's examples stay well below it).
const MAX_ORDER: u32 = 9;

/// One SIP polynomial: its order and its non-zero coefficients (p, q, value).
#[derive(Debug, Clone, PartialEq)]
struct Poly {
    name: &'static str,
    order: u32,
    terms: Vec<(u32, u32, f64)>,
}

impl Poly {
    /// Reads `{name}_ORDER` and the `{name}_p_q`; `None` when the order keyword is absent.
    fn read(h: &Header, name: &'static str) -> Result<Option<Poly>, WcsError> {
        let key = format!("{name}_ORDER");
        let Some(v) = h.get(&key) else {
            return Ok(None);
        };
        let order = match v.as_f64() {
            Some(o) if o.fract() == 0.0 && (0.0..=MAX_ORDER as f64).contains(&o) => o as u32,
            _ => {
                return Err(WcsError(format!(
                    "{key} = {v} is not a polynomial order from 0 to {MAX_ORDER}"
                )));
            }
        };
        let mut terms = Vec::new();
        for p in 0..=order {
            for q in 0..=order - p {
                let k = format!("{name}_{p}_{q}");
                if let Some(c) = super::num(h, &k)?
                    && c != 0.0
                {
                    terms.push((p, q, c));
                }
            }
        }
        Ok(Some(Poly { name, order, terms }))
    }

    fn eval(&self, u: f64, v: f64) -> f64 {
        self.terms
            .iter()
            .map(|&(p, q, c)| c * u.powi(p as i32) * v.powi(q as i32))
            .sum()
    }

    /// (d/du, d/dv) of the polynomial.
    fn grad(&self, u: f64, v: f64) -> (f64, f64) {
        let (mut du, mut dv) = (0.0, 0.0);
        for &(p, q, c) in &self.terms {
            if p > 0 {
                du += c * p as f64 * u.powi(p as i32 - 1) * v.powi(q as i32);
            }
            if q > 0 {
                dv += c * q as f64 * u.powi(p as i32) * v.powi(q as i32 - 1);
            }
        }
        (du, dv)
    }

    fn cards(&self, out: &mut Vec<Card>) {
        out.push(Card {
            key: format!("{}_ORDER", self.name),
            value: Some(Value::Int(self.order as i64)),
            comment: "SIP polynomial order".into(),
        });
        for &(p, q, c) in &self.terms {
            out.push(Card {
                key: format!("{}_{p}_{q}", self.name),
                value: Some(Value::Float(c)),
                comment: String::new(),
            });
        }
    }
}

/// The SIP polynomials of a map.
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Sip {
    a: Poly,
    b: Poly,
    ap: Option<Poly>,
    bp: Option<Poly>,
}

impl Sip {
    /// Reads the SIP keywords of a header whose CTYPEs carry `-SIP`.
    pub(super) fn read(h: &Header) -> Result<Sip, WcsError> {
        let need = |p: Option<Poly>, name: &str| {
            p.ok_or_else(|| {
                WcsError(format!(
                    "the CTYPEs name SIP distortion but {name}_ORDER is missing; add the SIP polynomials or remove '-SIP' from CTYPE1 and CTYPE2"
                ))
            })
        };
        let a = need(Poly::read(h, "A")?, "A")?;
        let b = need(Poly::read(h, "B")?, "B")?;
        let ap = Poly::read(h, "AP")?;
        let bp = Poly::read(h, "BP")?;
        // The stored inverse is used only as a starting point, and only when both are given.
        let (ap, bp) = match (ap, bp) {
            (Some(x), Some(y)) => (Some(x), Some(y)),
            _ => (None, None),
        };
        Ok(Sip { a, b, ap, bp })
    }

    /// Distorted offsets (u + f, v + g) of pixel offsets (u, v).
    pub(super) fn forward(&self, u: f64, v: f64) -> (f64, f64) {
        (u + self.a.eval(u, v), v + self.b.eval(u, v))
    }

    /// Jacobian of [`Sip::forward`]: rows d(u + f), d(v + g); columns d/du, d/dv.
    pub(super) fn jacobian(&self, u: f64, v: f64) -> [[f64; 2]; 2] {
        let (fu, fv) = self.a.grad(u, v);
        let (gu, gv) = self.b.grad(u, v);
        [[1.0 + fu, fv], [gu, 1.0 + gv]]
    }

    /// Pixel offsets (u, v) whose distorted offsets are (uu, vv), by Newton's method from the
    /// stored inverse (or from (uu, vv)); `None` if it does not converge (a point far outside
    /// the range the polynomials were fitted on).
    pub(super) fn inverse(&self, uu: f64, vv: f64) -> Option<(f64, f64)> {
        let (mut u, mut v) = match (&self.ap, &self.bp) {
            (Some(ap), Some(bp)) => (uu + ap.eval(uu, vv), vv + bp.eval(uu, vv)),
            _ => (uu, vv),
        };
        if !(u.is_finite() && v.is_finite()) {
            (u, v) = (uu, vv);
        }
        let scale = 1.0 + uu.abs().max(vv.abs());
        for _ in 0..100 {
            let (fu, fv) = self.forward(u, v);
            let (ru, rv) = (fu - uu, fv - vv);
            let j = self.jacobian(u, v);
            let det = j[0][0] * j[1][1] - j[0][1] * j[1][0];
            if det == 0.0 || !det.is_finite() {
                return None;
            }
            let du = (j[1][1] * ru - j[0][1] * rv) / det;
            let dv = (-j[1][0] * ru + j[0][0] * rv) / det;
            u -= du;
            v -= dv;
            if !(u.is_finite() && v.is_finite()) {
                return None;
            }
            if du.abs().max(dv.abs()) <= 1e-14 * scale {
                return Some((u, v));
            }
        }
        // Round-off can leave the last step a little above the threshold: accept a point
        // that reproduces the target to 1e-10 pixel.
        let (fu, fv) = self.forward(u, v);
        ((fu - uu).abs().max((fv - vv).abs()) <= 1e-10 * scale).then_some((u, v))
    }

    /// The SIP keywords, to copy with the rest of the WCS.
    pub(super) fn cards(&self) -> Vec<Card> {
        let mut out = Vec::new();
        self.a.cards(&mut out);
        self.b.cards(&mut out);
        if let (Some(ap), Some(bp)) = (&self.ap, &self.bp) {
            ap.cards(&mut out);
            bp.cards(&mut out);
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::wcs::tests::header;

    /// The polynomials as written in the convention: A_2_0 u^2 + A_1_1 u v + A_0_3 v^3 ...,
    /// the analytic Jacobian against central differences, and the inverse back to the start.
    #[test]
    fn forward_jacobian_and_inverse_agree() {
        let h = header(&[
            "A_ORDER = 3",
            "A_2_0   = 2.0E-5",
            "A_1_1   = -1.5E-5",
            "A_0_3   = 3.0E-8",
            "B_ORDER = 3",
            "B_0_2   = 1.0E-5",
            "B_2_1   = -2.0E-8",
        ]);
        let s = Sip::read(&h).unwrap();
        let (u, v) = (70.0, -45.0);
        let (fu, fv) = s.forward(u, v);
        assert_eq!(fu, u + 2.0e-5 * u * u - 1.5e-5 * u * v + 3.0e-8 * v * v * v);
        assert_eq!(fv, v + 1.0e-5 * v * v - 2.0e-8 * u * u * v);
        let j = s.jacobian(u, v);
        let e = 1e-3;
        let d = |du: f64, dv: f64| {
            let (a, b) = s.forward(u + du, v + dv);
            let (c, d) = s.forward(u - du, v - dv);
            ((a - c) / (2.0 * e), (b - d) / (2.0 * e))
        };
        let (dxu, dyu) = d(e, 0.0);
        let (dxv, dyv) = d(0.0, e);
        for (a, b) in [
            (j[0][0], dxu),
            (j[1][0], dyu),
            (j[0][1], dxv),
            (j[1][1], dyv),
        ] {
            assert!((a - b).abs() < 1e-9, "{a} {b}");
        }
        let (bu, bv) = s.inverse(fu, fv).unwrap();
        assert!((bu - u).abs() < 1e-10 && (bv - v).abs() < 1e-10);
    }

    #[test]
    fn missing_or_bad_orders_are_sentences() {
        let e = Sip::read(&header(&["A_ORDER = 2"])).unwrap_err();
        assert!(e.0.contains("B_ORDER is missing"), "{e}");
        let e = Sip::read(&header(&["A_ORDER = 2.5", "B_ORDER = 2"])).unwrap_err();
        assert!(e.0.contains("A_ORDER"), "{e}");
        let e = Sip::read(&header(&["A_ORDER = 12", "B_ORDER = 2"])).unwrap_err();
        assert!(e.0.contains("from 0 to 9"), "{e}");
    }
}

//! Measurements of each structure: position, size, shape and the map's sums, in pixels and,
//! with a WCS, on the sky.
//!
//! Owns the conversion of a structure's moment sums (gathered by [`crate::hierarchy`]) into
//! the quantities of the catalogue. Conventions:
//! * pixel coordinates are zero-based, (0, 0) the centre of the first pixel;
//! * the centroid and second moments are weighted by the map value over the structure's
//!   pixels (descendants included), as is common practice for emission structures; a
//!   structure whose value sum is not positive gets NaN for them;
//! * sizes: the weighted covariance of the pixel positions is carried to the sky through the
//!   local Jacobian of the projection at the centroid (east and north offsets in arcsec per
//!   pixel), and its eigenvalues give the major and minor standard deviations; FWHM = sigma *
//!   2 sqrt(2 ln 2); the effective radius is sqrt(A / pi) of the pixel area A;
//! * the position angle of the major axis is measured from north through east, in [0, 180)
//!   degrees (the IAU convention, common practice); the pixel-frame angle of the major axis is
//!   measured from the +x axis toward +y, in (-90, 90] degrees;
//! * the "sum above merge level" subtracts the level at which the structure joins its parent
//!   (the floor for roots) from every pixel: the structure's excess over its surroundings.

use crate::hierarchy::{Hierarchy, Structure};
use crate::wcs::Wcs;

/// FWHM / sigma of a Gaussian: 2 sqrt(2 ln 2).
pub const FWHM_PER_SIGMA: f64 = 2.354_820_045_030_949_3;

/// What a structure is in the hierarchy.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    /// No children: a core candidate (a top-level structure without children is a leaf too).
    Leaf,
    /// Children and a parent.
    Branch,
    /// Children and no parent.
    Root,
}

impl Kind {
    /// The word used in catalogues.
    pub fn word(self) -> &'static str {
        match self {
            Kind::Leaf => "leaf",
            Kind::Branch => "branch",
            Kind::Root => "root",
        }
    }
}

/// The eigen-decomposition of a 2x2 symmetric covariance [[a, b], [b, c]].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ellipse {
    /// Major-axis standard deviation.
    pub sigma_major: f64,
    /// Minor-axis standard deviation.
    pub sigma_minor: f64,
    /// Angle of the major axis from the first axis toward the second, radians in (-pi/2, pi/2].
    pub angle: f64,
}

/// Major and minor standard deviations and orientation of a covariance matrix.
pub fn ellipse(a: f64, b: f64, c: f64) -> Ellipse {
    let mean = 0.5 * (a + c);
    let half = (0.25 * (a - c) * (a - c) + b * b).sqrt();
    let l1 = mean + half;
    let l2 = (mean - half).max(0.0);
    let angle = 0.5 * (2.0 * b).atan2(a - c);
    Ellipse {
        sigma_major: l1.max(0.0).sqrt(),
        sigma_minor: l2.sqrt(),
        angle,
    }
}

/// Everything measured for one structure.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Measurement {
    /// Structure id.
    pub id: u32,
    /// Leaf, branch or root.
    pub kind: Kind,
    /// Parent id, or -1.
    pub parent: i64,
    /// Number of children.
    pub n_children: usize,
    /// Number of ancestors.
    pub depth: u32,
    /// Peak pixel column and row.
    pub peak_x: usize,
    /// Peak pixel row.
    pub peak_y: usize,
    /// Peak value, map units.
    pub peak: f64,
    /// Peak longitude (RA or l), degrees; NaN without WCS.
    pub peak_lon: f64,
    /// Peak latitude, degrees.
    pub peak_lat: f64,
    /// Value-weighted centroid column.
    pub x: f64,
    /// Value-weighted centroid row.
    pub y: f64,
    /// Centroid longitude, degrees.
    pub lon: f64,
    /// Centroid latitude, degrees.
    pub lat: f64,
    /// Number of pixels (descendants included).
    pub area_px: u64,
    /// Solid angle, arcsec^2 (pixels times the pixel solid angle at the centroid).
    pub area_arcsec2: f64,
    /// Solid angle of one pixel at the centroid (at the peak where the centroid is
    /// undefined), sr; NaN without a WCS. Not a catalogue column: the physics uses it.
    #[serde(skip)]
    pub pixel_sr: f64,
    /// sqrt(area / pi) in pixels.
    pub radius_px: f64,
    /// sqrt(area / pi) in arcsec.
    pub radius_arcsec: f64,
    /// Major-axis sigma, pixels.
    pub sigma_major_px: f64,
    /// Minor-axis sigma, pixels.
    pub sigma_minor_px: f64,
    /// Major-axis angle from +x toward +y, degrees.
    pub angle_px_deg: f64,
    /// Major-axis FWHM on the sky, arcsec.
    pub fwhm_major_arcsec: f64,
    /// Minor-axis FWHM on the sky, arcsec.
    pub fwhm_minor_arcsec: f64,
    /// Position angle of the major axis, degrees east of north.
    pub pa_deg: f64,
    /// Major / minor axis ratio.
    pub aspect: f64,
    /// Sum of the map over the structure, map units times pixels.
    pub sum: f64,
    /// Mean value.
    pub mean: f64,
    /// Level where it joins its parent (the floor for roots).
    pub merge_level: f64,
    /// Sum of (value - merge level) over the structure.
    pub sum_above_merge: f64,
    /// Whether it touches the map border.
    pub touches_edge: bool,
    /// Whether it touches a missing pixel.
    pub touches_missing: bool,
}

/// Local offsets on the sky per pixel step at (x, y): ((east, north) per +x, (east, north) per
/// +y), in arcsec. Central differences of half a pixel.
pub fn local_jacobian(w: &Wcs, x: f64, y: f64) -> Option<[[f64; 2]; 2]> {
    let (_, lat0) = w.pixel_to_sky(x, y)?;
    jacobian_at_latitude(w, x, y, lat0)
}

/// [`local_jacobian`] given the latitude of (x, y) itself, in degrees (from `pixel_to_sky`).
fn jacobian_at_latitude(w: &Wcs, x: f64, y: f64, lat0: f64) -> Option<[[f64; 2]; 2]> {
    let h = 0.5;
    let mut out = [[0.0; 2]; 2];
    for (k, (dx, dy)) in [(h, 0.0), (0.0, h)].into_iter().enumerate() {
        let (l1, b1) = w.pixel_to_sky(x + dx, y + dy)?;
        let (l0, b0) = w.pixel_to_sky(x - dx, y - dy)?;
        let mut dl = l1 - l0;
        if dl > 180.0 {
            dl -= 360.0;
        } else if dl < -180.0 {
            dl += 360.0;
        }
        let east = dl * lat0.to_radians().cos() * 3600.0 / (2.0 * h);
        let north = (b1 - b0) * 3600.0 / (2.0 * h);
        out[k] = [east, north];
    }
    Some(out)
}

/// Measures one structure.
pub fn measure(s: &Structure, h: &Hierarchy, wcs: Option<&Wcs>) -> Measurement {
    let m = &s.sums;
    let n = m.n as f64;
    let kind = if !s.children.is_empty() {
        if s.parent.is_some() {
            Kind::Branch
        } else {
            Kind::Root
        }
    } else {
        Kind::Leaf
    };
    let (x, y, cxx, cxy, cyy) = if m.sum > 0.0 {
        // Both from the sums about the structure's peak, so that small structures far from
        // the map's origin keep the precision of their second moments.
        let (x, y) = m.weighted_centroid();
        let (cxx, cxy, cyy) = m.weighted_covariance();
        (x, y, cxx, cxy, cyy)
    } else {
        (f64::NAN, f64::NAN, f64::NAN, f64::NAN, f64::NAN)
    };
    let e = ellipse(cxx, cxy, cyy);
    let radius_px = (n / std::f64::consts::PI).sqrt();
    let merge_level = s.merge_level.unwrap_or(h.params.floor);
    let nan = f64::NAN;
    let mut out = Measurement {
        id: s.id,
        kind,
        parent: s.parent.map(|p| p as i64).unwrap_or(-1),
        n_children: s.children.len(),
        depth: s.depth,
        peak_x: s.peak_x,
        peak_y: s.peak_y,
        peak: s.peak_value,
        peak_lon: nan,
        peak_lat: nan,
        x,
        y,
        lon: nan,
        lat: nan,
        area_px: m.n,
        area_arcsec2: nan,
        pixel_sr: nan,
        radius_px,
        radius_arcsec: nan,
        sigma_major_px: e.sigma_major,
        sigma_minor_px: e.sigma_minor,
        angle_px_deg: e.angle.to_degrees(),
        fwhm_major_arcsec: nan,
        fwhm_minor_arcsec: nan,
        pa_deg: nan,
        aspect: e.sigma_major / e.sigma_minor,
        sum: m.sum,
        mean: m.sum / n,
        merge_level,
        sum_above_merge: m.sum - n * merge_level,
        touches_edge: s.touches_edge,
        touches_missing: s.touches_missing,
    };
    if let Some(w) = wcs {
        if let Some((l, b)) = w.pixel_to_sky(s.peak_x as f64, s.peak_y as f64) {
            out.peak_lon = l;
            out.peak_lat = b;
        }
        // Where the weighted centroid is undefined, the peak stands in for sky scales.
        let (ax, ay) = if x.is_finite() {
            (x, y)
        } else {
            (s.peak_x as f64, s.peak_y as f64)
        };
        let centre = if x.is_finite() {
            w.pixel_to_sky(x, y)
        } else {
            None
        };
        if let Some((l, b)) = centre {
            out.lon = l;
            out.lat = b;
        }
        let omega = w.pixel_solid_angle(ax, ay);
        out.pixel_sr = omega;
        let arcsec2 = omega / (std::f64::consts::PI / 648_000.0).powi(2);
        out.area_arcsec2 = n * arcsec2;
        out.radius_arcsec = (out.area_arcsec2 / std::f64::consts::PI).sqrt();
        if let Some(j) = centre.and_then(|(_, b)| jacobian_at_latitude(w, x, y, b)) {
            // Sky covariance S = J C J^T with J columns the (east, north) offsets per pixel.
            let jm = [[j[0][0], j[1][0]], [j[0][1], j[1][1]]]; // rows: east, north
            let c = [[cxx, cxy], [cxy, cyy]];
            let mut jc = [[0.0; 2]; 2];
            for r in 0..2 {
                for k in 0..2 {
                    jc[r][k] = jm[r][0] * c[0][k] + jm[r][1] * c[1][k];
                }
            }
            let mut sky = [[0.0; 2]; 2];
            for r in 0..2 {
                for k in 0..2 {
                    sky[r][k] = jc[r][0] * jm[k][0] + jc[r][1] * jm[k][1];
                }
            }
            // First axis east, second north: the angle from east toward north.
            let es = ellipse(sky[0][0], sky[0][1], sky[1][1]);
            out.fwhm_major_arcsec = es.sigma_major * FWHM_PER_SIGMA;
            out.fwhm_minor_arcsec = es.sigma_minor * FWHM_PER_SIGMA;
            // PA east of north = 90 deg - (angle from east toward north).
            out.pa_deg = (90.0 - es.angle.to_degrees()).rem_euclid(180.0);
        }
    }
    out
}

/// Measures every structure of a hierarchy, in id order.
pub fn measure_all(h: &Hierarchy, wcs: Option<&Wcs>) -> Vec<Measurement> {
    use rayon::prelude::*;
    h.structures
        .par_iter()
        .map(|s| measure(s, h, wcs))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ellipse_of_a_rotated_covariance() {
        // sigma 3 along 30 degrees, sigma 1 across: C = R diag(9, 1) R^T.
        let (c, s) = (30f64.to_radians().cos(), 30f64.to_radians().sin());
        let a = 9.0 * c * c + s * s;
        let b = (9.0 - 1.0) * c * s;
        let d = 9.0 * s * s + c * c;
        let e = ellipse(a, b, d);
        assert!((e.sigma_major - 3.0).abs() < 1e-12);
        assert!((e.sigma_minor - 1.0).abs() < 1e-12);
        assert!((e.angle.to_degrees() - 30.0).abs() < 1e-10);
    }
}

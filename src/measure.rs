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
//!   (the floor for top-level structures) from every pixel: the structure's excess over its surroundings;
//! * beam-deconvolved sizes: the second-moment ellipse on the sky is read as a 2-D Gaussian,
//!   and since the covariances of Gaussians add under convolution, the intrinsic covariance
//!   is the measured one minus the beam's (both in arcsec^2 on the local east and north axes
//!   at the centroid, the beam's position angle taken from north there, as `pa` is). Where
//!   the difference is not positive definite the structure is not resolved along some
//!   direction and no deconvolved size is given. For a circular beam of standard deviation
//!   s_b this is the axis-by-axis (sigma^2 - s_b^2)^(1/2) of Rosolowsky & Leroy 2006 (PASP
//!   118, 590); for an elliptical beam at another angle the axes and the angle both change.
//!   No pixel-size term is removed: a map's pixels sample the beam-smoothed sky, and the
//!   moments of a well-sampled Gaussian are those of the Gaussian.

use crate::hierarchy::{Hierarchy, Structure};
use crate::map::Beam;
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

/// Covariance [[a, b], [b, c]] as (a, b, c) of a Gaussian with FWHM `major` along position
/// angle `pa_deg` (east of north) and `minor` across it, on the axes east and north, in the
/// square of the FWHMs' unit.
pub fn gaussian_sky_covariance(major: f64, minor: f64, pa_deg: f64) -> (f64, f64, f64) {
    // sigma^2 = FWHM^2 / (8 ln 2).
    let k = 1.0 / (8.0 * std::f64::consts::LN_2);
    let (sa, sb) = (major * major * k, minor * minor * k);
    // Major axis direction: east component sin(pa), north component cos(pa).
    let (s, c) = pa_deg.to_radians().sin_cos();
    (
        sa * s * s + sb * c * c,
        (sa - sb) * s * c,
        sa * c * c + sb * s * s,
    )
}

/// Position angle east of north, in [0, 180) degrees, of the major axis of an ellipse whose
/// first axis is east and second north.
pub fn position_angle(e: &Ellipse) -> f64 {
    // The angle is from east toward north: PA = 90 deg - that angle.
    (90.0 - e.angle.to_degrees()).rem_euclid(180.0)
}

/// The Gaussian that, convolved with the Gaussian of covariance `beam`, gives the covariance
/// `measured` (both (a, b, c) on the same axes): the ellipse of `measured` minus `beam`, or
/// `None` when that difference is not positive definite (the structure is no wider than the
/// beam along some direction) or undefined.
pub fn deconvolve(measured: (f64, f64, f64), beam: (f64, f64, f64)) -> Option<Ellipse> {
    let (a, b, c) = (
        measured.0 - beam.0,
        measured.1 - beam.1,
        measured.2 - beam.2,
    );
    // NaN fails every comparison.
    if a > 0.0 && c > 0.0 && a * c - b * b > 0.0 {
        Some(ellipse(a, b, c))
    } else {
        None
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
    /// Major-axis FWHM on the sky with the beam removed, arcsec (NaN without a beam or where
    /// the structure is not resolved along some direction, see [`deconvolve`]).
    pub fwhm_major_deconv_arcsec: f64,
    /// Minor-axis FWHM on the sky with the beam removed, arcsec (NaN as the major).
    pub fwhm_minor_deconv_arcsec: f64,
    /// Position angle of the deconvolved major axis, degrees east of north (NaN as the major).
    pub pa_deconv_deg: f64,
    /// Major / minor axis ratio.
    pub aspect: f64,
    /// Sum of the map over the structure, map units times pixels.
    pub sum: f64,
    /// Mean value.
    pub mean: f64,
    /// Level where it joins its parent (the floor for top-level structures).
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

/// Measures one structure; with a WCS and a beam, also its beam-deconvolved sizes.
pub fn measure(
    s: &Structure,
    h: &Hierarchy,
    wcs: Option<&Wcs>,
    beam: Option<&Beam>,
) -> Measurement {
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
        fwhm_major_deconv_arcsec: nan,
        fwhm_minor_deconv_arcsec: nan,
        pa_deconv_deg: nan,
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
            out.pa_deg = position_angle(&es);
            if let Some(b) = beam {
                let beam_cov =
                    gaussian_sky_covariance(b.major_deg * 3600.0, b.minor_deg * 3600.0, b.pa_deg);
                if let Some(d) = deconvolve((sky[0][0], sky[0][1], sky[1][1]), beam_cov) {
                    out.fwhm_major_deconv_arcsec = d.sigma_major * FWHM_PER_SIGMA;
                    out.fwhm_minor_deconv_arcsec = d.sigma_minor * FWHM_PER_SIGMA;
                    out.pa_deconv_deg = position_angle(&d);
                }
            }
        }
    }
    out
}

/// Measures every structure of a hierarchy, in id order.
pub fn measure_all(h: &Hierarchy, wcs: Option<&Wcs>, beam: Option<&Beam>) -> Vec<Measurement> {
    use rayon::prelude::*;
    h.structures
        .par_iter()
        .map(|s| measure(s, h, wcs, beam))
        .collect()
}

/// Measures the leaves of `h` over their grown footprints (`g`, made from `h`), in the order
/// of `g.ids`: [`measure`] of each grown structure, which takes the floor as its reference
/// level, with the leaf's own id, parent and depth in `h`.
pub fn measure_grown(
    g: &crate::hierarchy::GrownLeaves,
    h: &Hierarchy,
    wcs: Option<&Wcs>,
    beam: Option<&Beam>,
) -> Vec<Measurement> {
    let mut ms = measure_all(&g.hierarchy, wcs, beam);
    for (m, &id) in ms.iter_mut().zip(&g.ids) {
        let s = &h.structures[id as usize];
        m.id = id;
        m.parent = s.parent.map(|p| p as i64).unwrap_or(-1);
        m.depth = s.depth;
    }
    ms
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

    /// Covariance (east, north) of a Gaussian from its standard deviations and position angle,
    /// written out for the tests: major axis along (sin pa, cos pa).
    fn sky_cov(s_major: f64, s_minor: f64, pa_deg: f64) -> [[f64; 2]; 2] {
        let (s, c) = pa_deg.to_radians().sin_cos();
        let (u, v) = ([s, c], [c, -s]);
        let mut m = [[0.0; 2]; 2];
        for i in 0..2 {
            for j in 0..2 {
                m[i][j] = s_major * s_major * u[i] * u[j] + s_minor * s_minor * v[i] * v[j];
            }
        }
        m
    }

    /// Hand checks of the subtraction. For a circular beam of standard deviation s_b, the
    /// deconvolved axes are (sigma^2 - s_b^2)^(1/2) along the measured axes (Rosolowsky & Leroy
    /// 2006, PASP 118, 590, their deconvolution of each axis by a circular beam; from memory).
    /// An elliptical beam crossing the structure can leave it unresolved although each measured
    /// axis exceeds the beam's along-axis size: 14" x 8.5" at PA 0 against a 10" x 8" beam at
    /// PA 90 is narrower than the beam toward the east (8.5" < 10").
    #[test]
    fn deconvolution_by_hand() {
        let k = FWHM_PER_SIGMA;
        let cov = |m: [[f64; 2]; 2]| (m[0][0], m[0][1], m[1][1]);
        // Circular beam: FWHM 10" against 20" x 12" at PA 40.
        let d = deconvolve(
            cov(sky_cov(20.0 / k, 12.0 / k, 40.0)),
            gaussian_sky_covariance(10.0, 10.0, 0.0),
        )
        .unwrap();
        assert!((d.sigma_major * k - (400.0f64 - 100.0).sqrt()).abs() < 1e-12);
        assert!((d.sigma_minor * k - (144.0f64 - 100.0).sqrt()).abs() < 1e-12);
        assert!((position_angle(&d) - 40.0).abs() < 1e-9);
        // The beam's covariance is the one written out above.
        let b = gaussian_sky_covariance(9.0, 6.0, 110.0);
        let m = sky_cov(9.0 / k, 6.0 / k, 110.0);
        for (x, y) in [(b.0, m[0][0]), (b.1, m[0][1]), (b.2, m[1][1])] {
            assert!((x - y).abs() < 1e-12, "{b:?} {m:?}");
        }
        // Crossed: narrower than the beam toward the east.
        let crossed = cov(sky_cov(14.0 / k, 8.5 / k, 0.0));
        assert_eq!(
            deconvolve(crossed, gaussian_sky_covariance(10.0, 8.0, 90.0)),
            None
        );
        // The same beam aligned with the structure leaves 14^2 - 10^2 and 8.5^2 - 8^2.
        let d = deconvolve(crossed, gaussian_sky_covariance(10.0, 8.0, 0.0)).unwrap();
        assert!((d.sigma_major * k - 96f64.sqrt()).abs() < 1e-12);
        assert!((d.sigma_minor * k - 8.25f64.sqrt()).abs() < 1e-12);
        // Exactly the beam (a point source), and undefined moments: nothing.
        assert_eq!(deconvolve(b, b), None);
        assert_eq!(deconvolve((f64::NAN, 0.0, f64::NAN), b), None);
    }

    /// A Gaussian of known size and angle on the sky, convolved on a fine grid with an
    /// elliptical beam at another angle and measured through a sheared, rotated TAN grid, gives
    /// back its own size and angle; a point source convolved with the same beam gives none.
    ///
    /// The source has sigma 5" x 3" at PA 30 and the beam FWHM 9" x 6" at PA 110, both sampled
    /// at pixel centres (pixels of about 1") on a grid whose (east, north) offsets per pixel
    /// are (-1.0, 0.2)" along +x and (0.3, 1.1)" along +y, and convolved by direct summation.
    /// Tolerances: the floor at 1e-7 of the peak cuts the measured Gaussian at an isophote,
    /// which keeps all but 1.6e-6 of its variance (t e^-t with t = ln 1e7); subtracting the
    /// beam raises that to about 3e-6 of the deconvolved variance (1.5e-6 of the sizes) and,
    /// as source and beam are not aligned, can turn the axes by up to about 4e-6 radian
    /// (2e-4 degree). Sampling Gaussians of 2 pixels or more at pixel centres changes their
    /// moments by terms of order exp(-2 pi^2 sigma^2), nothing here; the beam kernel is cut
    /// at 7 standard deviations or more (a part in 1e10); f32 pixels round each value by 6e-8
    /// at most. So the sizes must agree to 1e-5 and the angle to 1e-3 degree.
    #[test]
    fn a_gaussian_convolved_with_an_elliptical_beam_deconvolves_to_its_own_size() {
        let k = FWHM_PER_SIGMA;
        // (east, north) arcsec per pixel: columns +x and +y.
        let jac = [[-1.0, 0.3], [0.2, 1.1]];
        // Inverse pixel covariance of a sky covariance m: (J^-1 m J^-T)^-1 = J^T m^-1 J.
        let pixel_precision = |m: [[f64; 2]; 2]| {
            let dm = m[0][0] * m[1][1] - m[0][1] * m[1][0];
            let mi = [[m[1][1] / dm, -m[0][1] / dm], [-m[1][0] / dm, m[0][0] / dm]];
            let mut p = [[0.0; 2]; 2];
            for i in 0..2 {
                for j in 0..2 {
                    for a in 0..2 {
                        for b in 0..2 {
                            p[i][j] += jac[a][i] * mi[a][b] * jac[b][j];
                        }
                    }
                }
            }
            p
        };
        let gauss = |p: [[f64; 2]; 2], dx: f64, dy: f64| {
            (-0.5 * (p[0][0] * dx * dx + 2.0 * p[0][1] * dx * dy + p[1][1] * dy * dy)).exp()
        };
        let (src_major, src_minor, src_pa) = (5.0, 3.0, 30.0);
        let (beam_major, beam_minor, beam_pa) = (9.0, 6.0, 110.0);
        let src = pixel_precision(sky_cov(src_major, src_minor, src_pa));
        let ker = pixel_precision(sky_cov(beam_major / k, beam_minor / k, beam_pa));
        let (n, c, reach) = (121usize, 60isize, 30isize);
        let kernel: Vec<f64> = (-reach..=reach)
            .flat_map(|ky| (-reach..=reach).map(move |kx| (kx, ky)))
            .map(|(kx, ky)| gauss(ker, kx as f64, ky as f64))
            .collect();
        let side = (2 * reach + 1) as usize;
        let convolve = |source: &dyn Fn(isize, isize) -> f64| {
            let mut out = ndarray::Array2::<f64>::zeros((n, n));
            for sy in 0..n as isize {
                for sx in 0..n as isize {
                    let v = source(sx - c, sy - c);
                    if v < 1e-30 {
                        continue;
                    }
                    for ky in -reach..=reach {
                        let y = sy + ky;
                        if y < 0 || y >= n as isize {
                            continue;
                        }
                        for kx in -reach..=reach {
                            let x = sx + kx;
                            if x < 0 || x >= n as isize {
                                continue;
                            }
                            let kv = kernel[(ky + reach) as usize * side + (kx + reach) as usize];
                            out[(y as usize, x as usize)] += v * kv;
                        }
                    }
                }
            }
            out.mapv(|v| v as f32)
        };
        let cards = [
            "CTYPE1  = 'RA---TAN'".to_string(),
            "CTYPE2  = 'DEC--TAN'".to_string(),
            format!("CRPIX1  = {}", c + 1),
            format!("CRPIX2  = {}", c + 1),
            "CRVAL1  = 200.0".to_string(),
            "CRVAL2  = 40.0".to_string(),
            format!("CD1_1   = {:e}", jac[0][0] / 3600.0),
            format!("CD1_2   = {:e}", jac[0][1] / 3600.0),
            format!("CD2_1   = {:e}", jac[1][0] / 3600.0),
            format!("CD2_2   = {:e}", jac[1][1] / 3600.0),
        ];
        let text: String = cards.iter().map(|c| format!("{c:<80}")).collect();
        let wcs = Wcs::from_header(&crate::header::Header::parse(&text))
            .unwrap()
            .unwrap();
        let beam = Beam {
            major_deg: beam_major / 3600.0,
            minor_deg: beam_minor / 3600.0,
            pa_deg: beam_pa,
        };
        let measured = |data: &ndarray::Array2<f32>| {
            let peak = data.iter().cloned().fold(f32::MIN, f32::max) as f64;
            let params = crate::hierarchy::Params {
                floor: 1e-7 * peak,
                prominence: 1e-3 * peak,
                min_area: 1,
                connectivity: crate::hierarchy::Connectivity::Eight,
            };
            let h = crate::hierarchy::build(data.view(), &params).unwrap();
            assert_eq!(h.structures.len(), 1);
            measure(&h.structures[0], &h, Some(&wcs), Some(&beam))
        };
        let m = measured(&convolve(&|dx, dy| gauss(src, dx as f64, dy as f64)));
        let (want_major, want_minor) = (src_major * k, src_minor * k);
        let rel = |a: f64, b: f64| (a - b).abs() / b;
        assert!(
            rel(m.fwhm_major_deconv_arcsec, want_major) < 1e-5,
            "{} against {want_major}",
            m.fwhm_major_deconv_arcsec
        );
        assert!(
            rel(m.fwhm_minor_deconv_arcsec, want_minor) < 1e-5,
            "{} against {want_minor}",
            m.fwhm_minor_deconv_arcsec
        );
        assert!(
            (m.pa_deconv_deg - src_pa).abs() < 1e-3,
            "{} against {src_pa}",
            m.pa_deconv_deg
        );
        // The measured (not deconvolved) size is the sum of the two covariances.
        let sum = {
            let (a, b) = (
                sky_cov(src_major, src_minor, src_pa),
                gaussian_sky_covariance(beam_major, beam_minor, beam_pa),
            );
            ellipse(a[0][0] + b.0, a[0][1] + b.1, a[1][1] + b.2)
        };
        assert!(rel(m.fwhm_major_arcsec, sum.sigma_major * k) < 1e-5);
        assert!(rel(m.fwhm_minor_arcsec, sum.sigma_minor * k) < 1e-5);
        // A point source: the beam itself, which the floor makes slightly narrower than the
        // beam, so there is nothing left to deconvolve.
        let p = measured(&convolve(&|dx, dy| {
            if dx == 0 && dy == 0 { 1.0 } else { 0.0 }
        }));
        assert!(rel(p.fwhm_major_arcsec, beam_major) < 1e-5, "{p:?}");
        assert!(p.fwhm_major_deconv_arcsec.is_nan() && p.fwhm_minor_deconv_arcsec.is_nan());
        assert!(p.pa_deconv_deg.is_nan());
    }
}

//! Bringing a map to a common linear resolution, so that clouds at different distances can be
//! compared fairly (`cairn segment --common-resolution 0.05pc`).
//!
//! Owns the smoothing kernel, the convolution and the regridding:
//! * the target is a circular Gaussian beam of FWHM theta_t = resolution / distance (small
//!   angles); the kernel is the Gaussian whose covariance is the target's minus the map's beam
//!   (Gaussians convolve by adding covariances, common practice), carried to pixel axes through
//!   the local Jacobian of the projection at the map centre; a beam larger than the target in
//!   any direction is refused;
//! * a target the map cannot hold MIN_BEAMS_ACROSS (3) times along each axis is refused
//!   before anything is allocated, in one sentence suggesting the largest usable resolution;
//! * the convolution is done by FFT on a zero-padded grid as a normalised convolution
//!   (Knutsson & Westin 1993): missing pixels get no weight and stay missing; the padding is
//!   four kernel standard deviations but at most the map's length per axis, so the FFT grid
//!   never exceeds three times the map's length per axis;
//! * units: intensive units (column density, extinction, MJy/sr, Jy/sr, mJy/arcsec2,
//!   Jy/arcmin2, MJy/deg2) keep their values' meaning; Jy/beam values are multiplied by the ratio of the new to the old
//!   beam solid angle; Jy/pixel values keep their per-pixel meaning;
//! * regridding: when the target beam spans more than six pixels, blocks of k x k pixels are
//!   averaged (summed for Jy/pixel), with k the largest integer keeping at least three pixels
//!   per FWHM, and the WCS is scaled to match (CD or CDELT times k; CRPIX moved so the sky
//!   position of every block centre is kept). Block averaging broadens the beam by the box's
//!   variance, (k^2 - 1)/12 pixel^2 per axis, which the smoothing kernel leaves room for.

use ndarray::Array2;
use rustfft::{FftPlanner, num_complex::Complex};

use crate::error::{Error, Result};
use crate::header::Value;
use crate::map::{Beam, Map};
use crate::measure::gaussian_sky_covariance;
use crate::units::PixelUnit;

/// A 2x2 symmetric matrix [[a, b], [b, c]].
pub(crate) type Cov = (f64, f64, f64);

/// A covariance on the sky (arcsec^2, axes east and north) carried to pixel axes,
/// K = J^-1 S J^-T, with `j` the local Jacobian of [`crate::measure::local_jacobian`] (pixel
/// offsets to (east, north) arcsec).
pub(crate) fn sky_cov_to_pixels(s: Cov, j: [[f64; 2]; 2]) -> [[f64; 2]; 2] {
    // J maps pixel offsets to (east, north) arcsec: columns are the +x and +y steps.
    let (j00, j01, j10, j11) = (j[0][0], j[1][0], j[0][1], j[1][1]);
    let det = j00 * j11 - j01 * j10;
    let (i00, i01, i10, i11) = (j11 / det, -j01 / det, -j10 / det, j00 / det);
    let m = [[s.0, s.1], [s.1, s.2]];
    let inv = [[i00, i01], [i10, i11]];
    let mut tmp = [[0.0; 2]; 2];
    for r in 0..2 {
        for k in 0..2 {
            tmp[r][k] = inv[r][0] * m[0][k] + inv[r][1] * m[1][k];
        }
    }
    let mut kc = [[0.0; 2]; 2];
    for r in 0..2 {
        for k in 0..2 {
            kc[r][k] = tmp[r][0] * inv[k][0] + tmp[r][1] * inv[k][1];
        }
    }
    kc
}

/// Zero padding (pixels) on each side along x and along y for a kernel of pixel covariance
/// `cov_px` on an `nx` x `ny` map: four standard deviations, but never more than the map's own
/// length along that axis. Kernel values at offsets of a map length or more only ever meet the
/// padding, so leaving them out changes no output pixel, and the FFT grid stays within three
/// times the map's length per axis however wide the kernel is.
fn fft_padding(nx: usize, ny: usize, cov_px: Cov) -> (usize, usize) {
    let (a, b, c) = cov_px;
    let sigma_max = (0.5 * (a + c) + (0.25 * (a - c) * (a - c) + b * b).sqrt()).sqrt();
    let reach = (4.0 * sigma_max).ceil();
    let pad = |n: usize| {
        if reach.is_finite() && reach + 1.0 < n as f64 {
            reach as usize + 1
        } else {
            n
        }
    };
    (pad(nx), pad(ny))
}

fn convolve_fft(data: &Array2<f32>, cov_px: Cov) -> Array2<f32> {
    let (ny, nx) = data.dim();
    let (a, b, c) = cov_px;
    let (pad_x, pad_y) = fft_padding(nx, ny, cov_px);
    let (py, px) = (ny + 2 * pad_y, nx + 2 * pad_x);
    let mut planner = FftPlanner::<f64>::new();
    let (fx, fy) = (planner.plan_fft_forward(px), planner.plan_fft_forward(py));
    let (ix, iy) = (planner.plan_fft_inverse(px), planner.plan_fft_inverse(py));
    let fft2 =
        |g: &mut Vec<Complex<f64>>, row: &dyn rustfft::Fft<f64>, col: &dyn rustfft::Fft<f64>| {
            for r in g.chunks_mut(px) {
                row.process(r);
            }
            let mut colbuf = vec![Complex::new(0.0, 0.0); py];
            for x in 0..px {
                for y in 0..py {
                    colbuf[y] = g[y * px + x];
                }
                col.process(&mut colbuf);
                for y in 0..py {
                    g[y * px + x] = colbuf[y];
                }
            }
        };
    // Kernel sampled at pixel offsets, normalised to unit sum, centred at (0, 0) with wrap.
    let det = a * c - b * b;
    let (ia, ib, ic) = (c / det, -b / det, a / det);
    let mut kern = vec![Complex::new(0.0, 0.0); px * py];
    let mut total = 0.0;
    let (rx, ry) = (pad_x as i64, pad_y as i64);
    for dy in -ry..=ry {
        for dx in -rx..=rx {
            let (x, y) = (dx as f64, dy as f64);
            let v = (-0.5 * (ia * x * x + 2.0 * ib * x * y + ic * y * y)).exp();
            let (xx, yy) = (
                dx.rem_euclid(px as i64) as usize,
                dy.rem_euclid(py as i64) as usize,
            );
            kern[yy * px + xx].re += v;
            total += v;
        }
    }
    for k in kern.iter_mut() {
        k.re /= total;
    }
    fft2(&mut kern, fx.as_ref(), fy.as_ref());
    let mut vals = vec![Complex::new(0.0, 0.0); px * py];
    let mut wts = vec![Complex::new(0.0, 0.0); px * py];
    for ((y, x), &v) in data.indexed_iter() {
        if v.is_finite() {
            vals[(y + pad_y) * px + x + pad_x].re = v as f64;
            wts[(y + pad_y) * px + x + pad_x].re = 1.0;
        }
    }
    fft2(&mut vals, fx.as_ref(), fy.as_ref());
    fft2(&mut wts, fx.as_ref(), fy.as_ref());
    for i in 0..px * py {
        vals[i] *= kern[i];
        wts[i] *= kern[i];
    }
    fft2(&mut vals, ix.as_ref(), iy.as_ref());
    fft2(&mut wts, ix.as_ref(), iy.as_ref());
    Array2::from_shape_fn((ny, nx), |(y, x)| {
        if !data[(y, x)].is_finite() {
            return f32::NAN;
        }
        let i = (y + pad_y) * px + x + pad_x;
        (vals[i].re / wts[i].re) as f32
    })
}

/// The fewest target beams (FWHM) the smoothed map must span along each axis: fewer leave no
/// room for a structure and the background around it (the default --min-area alone is one
/// beam), and a beam wider than the map would need a kernel and FFT grid far larger than it.
pub const MIN_BEAMS_ACROSS: f64 = 3.0;

/// `x` rounded down to three significant digits, for an "at most" in a message.
fn floor_3_digits(x: f64) -> String {
    if !(x.is_finite() && x > 0.0) {
        return format!("{x}");
    }
    let decimals = (2 - x.log10().floor() as i32).max(0);
    let scale = 10f64.powi(decimals);
    format!("{:.*}", decimals as usize, (x * scale).floor() / scale)
}

/// Refuses, before anything is allocated, a target beam that the map cannot hold
/// MIN_BEAMS_ACROSS times along each axis (pixel sides `sx`, `sy` in degrees).
fn check_map_holds_target(
    map: &Map,
    target_deg: f64,
    sx: f64,
    sy: f64,
    resolution_m: f64,
    distance_m: f64,
) -> Result<()> {
    let (wx, wy) = (map.nx() as f64 * sx * 3600.0, map.ny() as f64 * sy * 3600.0);
    let t = target_deg * 3600.0;
    let across = wx.min(wy) / t;
    if across >= MIN_BEAMS_ACROSS {
        return Ok(());
    }
    let pc = crate::physics::constants::PC;
    // Six significant digits, so that 0.5 pc given prints as 0.5 and not 0.49999999999999994.
    let short = |x: f64| format!("{}", format!("{x:.5e}").parse::<f64>().unwrap_or(x));
    let asked = format!(
        "--common-resolution {} pc at {} pc asks for a beam of {t:.1}\" FWHM",
        short(resolution_m / pc),
        short(distance_m / pc)
    );
    let file = map.path.display();
    let extent = format!("{wx:.1}\" x {wy:.1}\"");
    let problem = if !(across.is_finite() && across > 0.0) {
        format!("but the pixel size of {file} at its centre cannot be measured")
    } else if across < 1.0 {
        format!("wider than the whole of {file} ({extent})")
    } else {
        format!(
            "but {file} is only {extent} ({:.2} beams across) and at least {MIN_BEAMS_ACROSS} beams across are needed to find structures",
            (across * 100.0).floor() / 100.0
        )
    };
    let most = resolution_m * across / MIN_BEAMS_ACROSS / pc;
    // The finest resolution allowed at all is the map's own beam.
    let least = map
        .beam
        .map_or(0.0, |b| b.major_deg.to_radians() * distance_m / pc);
    let fix = if most.is_finite() && most > 0.0 && most < least {
        "the map is too small for any common resolution at this distance: give a larger map"
            .to_string()
    } else if most.is_finite() && most > 0.0 {
        format!(
            "give a smaller --common-resolution (at most {} pc at this distance) or a larger map",
            floor_3_digits(most)
        )
    } else {
        "give a smaller --common-resolution or a larger map".to_string()
    };
    Err(Error::usage(format!("{asked}, {problem}; {fix}.")))
}

/// What [`to_common_resolution`] did to a map, in words for the summary ("smoothed to a
/// 68.75" beam (0.1 pc at 300 pc) and regridded by 2 x 2 pixels"); `None` for a map not
/// smoothed.
pub fn describe(map: &Map) -> Option<String> {
    let c = map.common_resolution?;
    let beam = map.beam?;
    Some(format!(
        "smoothed to a {:.2}\" beam ({} pc at {} pc){}",
        beam.major_deg * 3600.0,
        crate::units::tidy(c.resolution_m / crate::physics::constants::PC),
        crate::units::tidy(c.distance_m / crate::physics::constants::PC),
        if c.block >= 2 {
            format!(" and regridded by {0} x {0} pixels", c.block)
        } else {
            String::new()
        }
    ))
}

/// The map smoothed (and regridded) to a circular beam of `resolution_m` at `distance_m`.
pub fn to_common_resolution(map: &Map, resolution_m: f64, distance_m: f64) -> Result<Map> {
    let path = &map.path;
    // A unit cairn does not convert is smoothed and averaged as a brightness (K, K km/s),
    // which is wrong for one per beam or per pixel: their values change with the beam or the
    // pixel in a way cairn cannot know from the unit's text.
    // Only units read as a brightness are smoothed: a temperature (K, mK, K km/s) or a
    // quantity per steradian; a per-pixel count (Jy, counts, ADU) or a map without a unit is
    // refused, as averaging would not keep its sums.
    if let Some(PixelUnit::Other) = map.unit {
        let lower = map.unit_text.to_ascii_lowercase();
        let first = lower.split([' ', '.', '*', '/']).next().unwrap_or("");
        let brightness = matches!(first, "k" | "mk" | "uk")
            || lower.contains("/sr")
            || lower.contains("sr-1")
            || lower.contains("sr^-1");
        if lower.contains("beam") || lower.contains("pix") || !brightness {
            return Err(Error::input(
                path,
                format!(
                    "is in {}, a unit that cairn does not convert and cannot tell to be a brightness (a temperature such as K or K km/s, or a quantity per steradian), so it cannot be rescaled to a new beam; bring it to the common resolution elsewhere, or leave out --common-resolution.",
                    if map.unit_text.is_empty() {
                        "no unit"
                    } else {
                        &map.unit_text
                    }
                ),
            ));
        }
    }
    let w = map.wcs.as_ref().ok_or_else(|| {
        Error::input(
            path,
            "has no celestial WCS, so it cannot be brought to a linear resolution.",
        )
    })?;
    let beam = map.beam.ok_or_else(|| {
        Error::input(
            path,
            "has no beam; give --beam so the smoothing kernel can be found.",
        )
    })?;
    let target_deg = (resolution_m / distance_m).to_degrees();
    if target_deg < beam.major_deg * (1.0 - 1e-9) {
        return Err(Error::usage(format!(
            "--common-resolution asks for a beam of {:.2}\" at this distance, finer than the map's {:.2}\" beam; choose a coarser resolution.",
            target_deg * 3600.0,
            beam.major_deg * 3600.0
        )));
    }
    // At the map's centre, or the pixel on the sky inspect names where that lies off the sky.
    let (cx, cy) = crate::inspect::scale_pixel(map)
        .unwrap_or(((map.nx() as f64 - 1.0) / 2.0, (map.ny() as f64 - 1.0) / 2.0));
    let (sx, sy) = w.pixel_scale(cx, cy);
    check_map_holds_target(map, target_deg, sx, sy, resolution_m, distance_m)?;
    let j = crate::measure::local_jacobian(w, cx, cy).ok_or_else(|| {
        Error::input(
            path,
            "has a WCS that cannot be evaluated at the map centre.",
        )
    })?;
    // Sky covariance of the kernel (arcsec^2), then pixel covariance K = J^-1 S J^-T.
    let bc = gaussian_sky_covariance(
        beam.major_deg * 3600.0,
        beam.minor_deg * 3600.0,
        beam.pa_deg,
    );
    let t = target_deg * 3600.0;
    let tc = gaussian_sky_covariance(t, t, 0.0);
    let s = (tc.0 - bc.0, tc.1 - bc.1, tc.2 - bc.2);
    let kc = sky_cov_to_pixels(s, j);
    // Regridding by blocks of k x k pixels (see below) is itself a convolution with a box of
    // variance (k^2 - 1)/12 pixel^2 per axis: the kernel leaves that much room.
    let per_fwhm = target_deg / (sx * sy).sqrt();
    let k = if per_fwhm > 6.0 {
        // Never fewer than MIN_BEAMS_ACROSS pixels per axis after regridding, even with very
        // unequal pixel sides (the check above already keeps this so for square pixels).
        let limit = (map.nx().min(map.ny()) / MIN_BEAMS_ACROSS as usize).max(1);
        ((per_fwhm / 3.0).floor() as usize).min(limit).max(1)
    } else {
        1
    };
    let boxvar = ((k * k) as f64 - 1.0) / 12.0;
    let kcov = (
        kc[0][0] - boxvar,
        0.5 * (kc[0][1] + kc[1][0]),
        kc[1][1] - boxvar,
    );
    let mut data = if kcov.0 > 1e-6 && kcov.2 > 1e-6 && kcov.0 * kcov.2 - kcov.1 * kcov.1 > 1e-9 {
        convolve_fft(&map.data, kcov)
    } else {
        map.data.clone()
    };
    let new_beam = Beam {
        major_deg: target_deg,
        minor_deg: target_deg,
        pa_deg: 0.0,
    };
    if let Some(PixelUnit::FluxPerBeam { .. }) = map.unit {
        let f = (new_beam.solid_angle_sr() / beam.solid_angle_sr()) as f32;
        data.mapv_inplace(|v| v * f);
    }
    let mut out = map.clone();
    out.common_resolution = Some(crate::map::CommonResolution {
        resolution_m,
        distance_m,
        input_beam: beam,
        block: k.max(1),
    });
    out.beam = Some(new_beam);
    out.beam_source = Some(crate::map::Source::Option);
    // Regrid by whole blocks keeping at least three pixels per FWHM.
    if k >= 2 {
        let sum = matches!(map.unit, Some(PixelUnit::FluxPerPixel { .. }));
        let (ny, nx) = (map.ny() / k, map.nx() / k);
        data = Array2::from_shape_fn((ny, nx), |(y, x)| {
            let (mut s, mut n) = (0.0f64, 0usize);
            for yy in y * k..(y + 1) * k {
                for xx in x * k..(x + 1) * k {
                    let v = data[(yy, xx)];
                    if v.is_finite() {
                        s += v as f64;
                        n += 1;
                    }
                }
            }
            if n * 2 < k * k {
                f32::NAN
            } else if sum {
                (s / n as f64 * (k * k) as f64) as f32
            } else {
                (s / n as f64) as f32
            }
        });
        let mut h = map.header.clone();
        for key in ["CD1_1", "CD1_2", "CD2_1", "CD2_2", "CDELT1", "CDELT2"] {
            if let Some(v) = h.get_f64(key) {
                h.set(key, Value::Float(v * k as f64), "");
            }
        }
        for axis in [1, 2] {
            let key = format!("CRPIX{axis}");
            let v = h.get_f64(&key).unwrap_or(0.0);
            // FITS pixel p (1-based) of the old grid falls at (p - 0.5) / k + 0.5 on the new.
            h.set(&key, Value::Float((v - 0.5) / k as f64 + 0.5), "");
        }
        h.set("NAXIS1", Value::Int(nx as i64), "");
        h.set("NAXIS2", Value::Int(ny as i64), "");
        out.wcs = crate::wcs::Wcs::from_header(&h).map_err(|e| Error::internal(e.to_string()))?;
        out.header = h;
    }
    let mut h = out.header.clone();
    h.set(
        "BMAJ",
        Value::Float(target_deg),
        "deg, after smoothing to a common resolution",
    );
    h.set("BMIN", Value::Float(target_deg), "deg");
    h.set("BPA", Value::Float(0.0), "deg");
    out.header = h;
    out.data = data;
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A kernel much wider than the map: the FFT grid stays within three map lengths per
    /// axis, and the result is the direct normalised convolution (Knutsson & Westin 1993).
    #[test]
    fn a_kernel_wider_than_the_map_keeps_the_fft_small_and_the_result_exact() {
        let (nx, ny) = (9usize, 7usize);
        let cov = (400.0, 30.0, 250.0);
        let (pad_x, pad_y) = fft_padding(nx, ny, cov);
        assert_eq!((pad_x, pad_y), (nx, ny));
        assert_eq!(fft_padding(200, 150, (4.0, 0.0, 4.0)), (9, 9));
        let data = Array2::from_shape_fn((ny, nx), |(y, x)| {
            if (x, y) == (3, 2) {
                f32::NAN
            } else {
                ((x * 5 + y * 11) % 13) as f32 - 4.0
            }
        });
        let got = convolve_fft(&data, cov);
        let (a, b, c) = cov;
        let det = a * c - b * b;
        let k =
            |dx: f64, dy: f64| (-0.5 * (c * dx * dx - 2.0 * b * dx * dy + a * dy * dy) / det).exp();
        for ((y, x), &g) in got.indexed_iter() {
            if !data[(y, x)].is_finite() {
                assert!(g.is_nan());
                continue;
            }
            let (mut s, mut w) = (0.0, 0.0);
            for ((j, i), &v) in data.indexed_iter() {
                if v.is_finite() {
                    let kv = k(x as f64 - i as f64, y as f64 - j as f64);
                    s += kv * v as f64;
                    w += kv;
                }
            }
            let want = s / w;
            assert!(
                (g as f64 - want).abs() <= 1e-5 * (1.0 + want.abs()),
                "({x}, {y}): {g} against {want}"
            );
        }
    }

    #[test]
    fn at_most_rounds_down_to_three_digits() {
        assert_eq!(floor_3_digits(0.18619), "0.186");
        assert_eq!(floor_3_digits(12.99), "12.9");
        assert_eq!(floor_3_digits(1234.5), "1234");
    }
}

//! The error columns with a noise map: each structure's own noise. A noise map that is the same
//! everywhere gives the errors of that noise given as one number; one three times higher on
//! the right half of the map gives three times the errors to the leaves lying wholly there and
//! the same errors to those wholly on the left (the errors scale linearly with the noise: the
//! noise of a sum, sigma sqrt(N_beam sum f^2), common practice).

use std::collections::HashMap;
use std::path::Path;

use cairn::inspect::NoiseChoice;
use cairn::segment::{Level, SegmentOptions};

#[path = "common/segment_fixture.rs"]
mod segment_fixture;

const SIGMA: f32 = 1.0e20;

fn rows(csv: &Path) -> Vec<HashMap<String, String>> {
    let text = std::fs::read_to_string(csv).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<String> = lines.next().unwrap().split(',').map(String::from).collect();
    lines
        .map(|l| {
            header
                .iter()
                .cloned()
                .zip(l.split(',').map(String::from))
                .collect()
        })
        .collect()
}

fn run(dir: &Path, name: &str, noise: NoiseChoice) -> Vec<HashMap<String, String>> {
    let map_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/segment/map.fits");
    let map = cairn::map::load(&map_path, &Default::default()).unwrap();
    let mut o: SegmentOptions = segment_fixture::fixture_options(&dir.join(name));
    o.noise = noise;
    o.floor = Some(Level::Value(3.2e21));
    o.physics.distance_m = Some(300.0 * cairn::physics::constants::PC);
    cairn::segment::run(&map, &o, &|_, _| {}).unwrap();
    rows(&dir.join(name).join("structures.csv"))
}

#[test]
fn errors_follow_each_structures_own_noise() {
    let d = tempfile::tempdir().unwrap();
    let map_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/segment/map.fits");
    let map = cairn::map::load(&map_path, &Default::default()).unwrap();
    let (ny, nx) = map.data.dim();
    let write = |name: &str, f: &dyn Fn(usize) -> f32| {
        let a = ndarray::Array2::from_shape_fn((ny, nx), |(_, x)| f(x));
        let p = d.path().join(name);
        cairn::fits_write::write_image_f32(&p, a.view(), &map.header, true).unwrap();
        p
    };
    let flat = write("flat.fits", &|_| SIGMA);
    let half = write("half.fits", &|x| {
        if x < nx / 2 { SIGMA } else { 3.0 * SIGMA }
    });
    let one = run(d.path(), "one", NoiseChoice::Value(SIGMA as f64));
    let same = run(d.path(), "flat", NoiseChoice::Map(flat));
    let split = run(d.path(), "half", NoiseChoice::Map(half));
    assert_eq!(one.len(), same.len());
    assert_eq!(one.len(), split.len());
    let num = |r: &HashMap<String, String>, k: &str| r[k].parse::<f64>().unwrap();
    // Each leaf's columns of pixels, from the label map of the uniform run.
    let labels = cairn::map::load(
        &d.path().join("one/labels.fits"),
        &cairn::map::LoadOptions {
            require_unit: false,
            ..Default::default()
        },
    )
    .unwrap();
    let mut span: HashMap<i64, (usize, usize)> = HashMap::new();
    for ((_, x), v) in labels.data.indexed_iter() {
        if v.is_finite() && *v >= 0.0 {
            let e = span.entry(*v as i64).or_insert((x, x));
            e.0 = e.0.min(x);
            e.1 = e.1.max(x);
        }
    }
    let (mut left, mut right) = (0, 0);
    for ((a, b), c) in one.iter().zip(&same).zip(&split) {
        for k in ["mass_err", "n_peak_err"] {
            let (ea, eb) = (num(a, k), num(b, k));
            assert!((eb / ea - 1.0).abs() < 1e-12, "{k}: {ea} vs {eb}");
        }
        if a["kind"] != "leaf" {
            continue;
        }
        let (x0, x1) = span[&a["id"].parse::<i64>().unwrap()];
        let factor = if x1 < nx / 2 {
            left += 1;
            1.0
        } else if x0 >= nx / 2 {
            right += 1;
            3.0
        } else {
            continue;
        };
        for k in ["mass_err", "n_peak_err"] {
            let (ea, ec) = (num(a, k), num(c, k));
            assert!(
                (ec / ea - factor).abs() < 1e-12,
                "{k} of {}: {ea} vs {ec}",
                a["id"]
            );
        }
        // The masses themselves do not depend on the noise (summed pixel by pixel here and
        // from the engine's sums there, so equal to rounding).
        let (ma, mc) = (num(a, "mass"), num(c, "mass"));
        assert!((mc / ma - 1.0).abs() < 1e-12, "mass {ma} vs {mc}");
    }
    assert!(
        left >= 2 && right >= 2,
        "leaves on each side: {left} {right}"
    );
}

/// A noise map of the map's shape on another sky grid is refused with the pixel where the two
/// part: shifted by 2 pixels, or on the sky where the map's corners lie off it (an all-sky AIT
/// map beside a TAN grid of the same shape). A stated property: the same grid means the same
/// sky position at each pixel (within a tenth of a pixel).
#[test]
fn noise_maps_on_another_sky_grid_are_refused() {
    use cairn::header::{Header, Value};
    let d = tempfile::tempdir().unwrap();
    let (nx, ny) = (60usize, 30usize);
    let write = |name: &str, ctype: (&str, &str), cdelt: f64, crval1: f64| {
        let mut h = Header::new();
        for (k, v) in [
            ("CTYPE1", Value::Str(ctype.0.into())),
            ("CTYPE2", Value::Str(ctype.1.into())),
            ("CRPIX1", Value::Float(30.5)),
            ("CRPIX2", Value::Float(15.5)),
            ("CRVAL1", Value::Float(crval1)),
            ("CRVAL2", Value::Float(0.0)),
            ("CDELT1", Value::Float(-cdelt)),
            ("CDELT2", Value::Float(cdelt)),
            ("BUNIT", Value::Str("MJy/sr".into())),
        ] {
            h.set(k, v, "");
        }
        let data = ndarray::Array2::<f32>::from_elem((ny, nx), 1.0);
        let path = d.path().join(name);
        cairn::fits_write::write_image_f32(&path, data.view(), &h, false).unwrap();
        path
    };
    let load = |p: &Path| cairn::map::load(p, &cairn::map::LoadOptions::default()).unwrap();
    let refused = |map: &Path, noise: &Path, says: &str| {
        let e = cairn::inspect::load_noise_map(&load(map), noise)
            .err()
            .unwrap_or_else(|| panic!("{} accepted", noise.display()));
        assert!(
            e.message.contains("but not its sky grid") && e.message.contains(says),
            "{}",
            e.message
        );
    };
    let map = write("map.fits", ("RA---TAN", "DEC--TAN"), 0.01, 150.0);
    let same = write("same.fits", ("RA---TAN", "DEC--TAN"), 0.01, 150.0);
    assert!(cairn::inspect::load_noise_map(&load(&map), &same).is_ok());
    let shifted = write("shifted.fits", ("RA---TAN", "DEC--TAN"), 0.01, 150.02);
    refused(&map, &shifted, "arcsec away");
    let sky = write("sky.fits", ("RA---AIT", "DEC--AIT"), 6.5, 0.0);
    let tan = write("tan.fits", ("RA---TAN", "DEC--TAN"), 0.01, 0.0);
    refused(
        &sky,
        &tan,
        "lies on the sky in one grid and off it in the other",
    );
}

//! `--common-resolution` targets that the map cannot hold are refused up front in one sentence
//! (no runaway allocation, no confusing --min-area message), and each plane of a cube along a
//! FREQ or WAVE axis gets its own wavelength.
//!
//! Reference for the planes: astropy 8.0.2 astropy.wcs, `WCS(header).spectral.pixel_to_world`
//! of each zero-based plane, stored in fixtures/fits/spectral.json with the cubes themselves by
//! tests/oracle/fits_astropy.py.

#[path = "common/catalogue_files.rs"]
mod catalogue_files;
#[path = "common/cli.rs"]
mod cli;
mod common;

use std::path::{Path, PathBuf};

use cairn::header::{Header, Value};
use cairn::map::{self, LoadOptions};
use cli::{Outcome, listing};
use common::{assert_close, fixture_json, fixture_path, nums};

/// Runs cairn in `dir` with its address space limited to 3 GB, so that a runaway allocation
/// fails the test instead of exhausting the machine.
fn cairn(args: &[&str], dir: &Path) -> Outcome {
    cli::cairn_limited(args, dir, 3_000_000)
}

/// The map of the review: 64 x 64 pixels of 6", an 18" beam, Jy/beam, a few Gaussian clumps.
fn write_good_map(dir: &Path) -> PathBuf {
    write_map(dir, "good.fits", 64)
}

/// An n x n map of 6" pixels with an 18" beam, in Jy/beam.
fn write_map(dir: &Path, name: &str, n: usize) -> PathBuf {
    let (nx, ny) = (n, n);
    let mut h = Header::new();
    let mut set = |k: &str, v: Value| h.set(k, v, "");
    set("CTYPE1", Value::Str("RA---TAN".into()));
    set("CTYPE2", Value::Str("DEC--TAN".into()));
    set("CRPIX1", Value::Float(n as f64 / 2.0 + 0.5));
    set("CRPIX2", Value::Float(n as f64 / 2.0 + 0.5));
    set("CRVAL1", Value::Float(150.0));
    set("CRVAL2", Value::Float(10.0));
    set("CDELT1", Value::Float(-6.0 / 3600.0));
    set("CDELT2", Value::Float(6.0 / 3600.0));
    set("BMAJ", Value::Float(18.0 / 3600.0));
    set("BMIN", Value::Float(18.0 / 3600.0));
    set("BPA", Value::Float(0.0));
    set("BUNIT", Value::Str("Jy/beam".into()));
    let clumps = [
        (20.0, 22.0, 1.0, 4.0),
        (44.0, 40.0, 0.6, 6.0),
        (30.0, 50.0, 0.4, 3.0),
    ];
    let data = ndarray::Array2::from_shape_fn((ny, nx), |(y, x)| {
        let mut v = 0.01 * (((x * 7 + y * 13) % 17) as f32 / 17.0 - 0.5);
        for (cx, cy, peak, s) in clumps {
            let r2 = (x as f64 - cx).powi(2) + (y as f64 - cy).powi(2);
            v += (peak * (-0.5 * r2 / (s * s)).exp()) as f32;
        }
        v
    });
    let p = dir.join(name);
    cairn::fits_write::write_image_f32(&p, data.view(), &h, false).unwrap();
    p
}

/// The rule for bad input ([`cli::check_refused`]), a sentence containing each of `says`, and
/// nothing written.
fn assert_refused(dir: &Path, args: &[&str], says: &[&str]) -> String {
    let before = listing(dir);
    let o = cairn(args, dir);
    for s in says {
        cli::check_refused(&o, args, s, s);
    }
    assert_eq!(listing(dir), before, "{args:?}: nothing written");
    o.stderr
}

#[test]
fn a_target_beam_wider_than_the_map_is_refused_before_any_large_allocation() {
    let d = tempfile::tempdir().unwrap();
    write_good_map(d.path());
    // 100 pc at 300 pc is 1/3 rad = 68754.9", against a map of 64 x 6" = 384".
    let args = [
        "segment",
        "good.fits",
        "-o",
        "out",
        "--no-figure",
        "--common-resolution",
        "100pc",
        "--distance",
        "300pc",
    ];
    let e = assert_refused(
        d.path(),
        &args,
        &[
            "--common-resolution 100 pc at 300 pc",
            "68754.9\"",
            "good.fits",
            "384.0\" x 384.0\"",
            "wider than the whole of",
            "give a smaller --common-resolution",
            "or a larger map",
        ],
    );
    assert!(!e.contains("--min-area"), "{e}");
}

#[test]
fn a_map_only_a_beam_across_after_smoothing_is_refused_about_common_resolution() {
    let d = tempfile::tempdir().unwrap();
    write_good_map(d.path());
    // 0.5 pc at 300 pc is 343.8": the 384" map would be 1.1 beams (3 x 3 pixels) across.
    let args = [
        "segment",
        "good.fits",
        "-o",
        "out",
        "--no-figure",
        "--common-resolution",
        "0.5pc",
        "--distance",
        "300pc",
    ];
    let e = assert_refused(
        d.path(),
        &args,
        &[
            "--common-resolution 0.5 pc at 300 pc",
            "343.8\"",
            "good.fits is only 384.0\" x 384.0\" (1.11 beams across)",
            "at least 3 beams across",
            "give a smaller --common-resolution (at most 0.186 pc at this distance)",
        ],
    );
    assert!(!e.contains("--min-area"), "{e}");
}

#[test]
fn the_largest_suggested_resolution_is_accepted() {
    let d = tempfile::tempdir().unwrap();
    let p = write_good_map(d.path());
    let pc = cairn::physics::constants::PC;
    let m = map::load(&p, &LoadOptions::default()).unwrap();
    // The suggestion of the refusal above, and a little more refused.
    let s = cairn::resolution::to_common_resolution(&m, 0.186 * pc, 300.0 * pc).unwrap();
    assert!(s.nx() >= 9 && s.ny() >= 9, "{} x {}", s.nx(), s.ny());
    let e = cairn::resolution::to_common_resolution(&m, 0.187 * pc, 300.0 * pc).unwrap_err();
    assert!(e.message.contains("2.98 beams across"), "{e}");
    // And the command line segments a map smoothed well within the limit.
    let o = cairn(
        &[
            "segment",
            "good.fits",
            "-o",
            "out",
            "--no-figure",
            "--common-resolution",
            "0.1pc",
            "--distance",
            "300pc",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr.contains("smoothed to a 68.75\" beam") && !o.stderr.contains("warning: smoothed"),
        "{}",
        o.stderr
    );
    // The catalogue says its pixel columns are on the smoothed map's grid (that of
    // labels.fits), by how many of the file's pixels, and to what resolution.
    let csv = std::fs::read_to_string(d.path().join("out/structures.csv")).unwrap();
    let labels = map::load(
        &d.path().join("out/labels.fits"),
        &LoadOptions {
            require_unit: false,
            ..LoadOptions::default()
        },
    )
    .unwrap();
    let block = m.nx() / labels.nx();
    assert!(block >= 2, "{} -> {}", m.nx(), labels.nx());
    for says in [
        "# parameter common_resolution = 0.1  ([pc] linear resolution".to_string(),
        format!("# parameter regrid_block = {block}  ("),
        format!(
            "# note: the map was smoothed to a common resolution of 0.1 pc at 300 pc and regridded by blocks of {block} x {block} of its pixels: pixel positions, areas and sizes in pixels refer to the grid of labels.fits"
        ),
        "# parameter distance = 300.0  ([pc] distance)".to_string(),
    ] {
        assert!(csv.contains(&says), "{says}");
    }
}

#[test]
fn each_plane_of_a_spectral_cube_has_the_wavelength_astropy_gives() {
    let v = fixture_json("fits/spectral.json");
    assert_eq!(v["astropy"], "8.0.2");
    let c = cairn::units::C_LIGHT;
    for name in ["cube_freq.fits", "cube_wave.fits", "cube_freqlog.fits"] {
        let r = &v["files"][name];
        let planes = nums(&r["planes"]);
        let freq = nums(&r["frequency_hz"]);
        let wave = nums(&r["wavelength_m"]);
        assert!(planes.len() >= 3, "{name}");
        for (i, &p) in planes.iter().enumerate() {
            let opts = LoadOptions {
                plane: Some(p as usize),
                ..LoadOptions::default()
            };
            let m = map::load(&fixture_path(&format!("fits/{name}")), &opts).unwrap();
            assert_eq!(m.plane, Some(p as usize));
            let got = m.wavelength_m.unwrap_or(f64::NAN);
            let what = format!("{name} plane {p} (astropy 8.0.2 WCS.spectral.pixel_to_world)");
            // A FREQ axis against c / frequency, a WAVE axis against the wavelength.
            let reference = if name == "cube_wave.fits" {
                wave[i]
            } else {
                c / freq[i]
            };
            assert_close(got, reference, 1e-12, 0.0, &what);
            assert!(
                m.warnings.iter().all(|w| !w.contains("wavelength")),
                "{what}"
            );
        }
    }
    // The planes differ: 250, 350 and 450 GHz.
    let f = nums(&v["files"]["cube_freq.fits"]["frequency_hz"]);
    assert_eq!(f, vec![2.5e11, 3.5e11, 4.5e11]);
}

#[test]
fn a_squeezed_spectral_axis_gives_its_value_at_its_one_pixel_as_astropy_does() {
    // Maps with a length-1 FREQ or WAVE axis whose pixel is not the reference pixel
    // (CRPIX3 2 and 0): astropy 8.0.2 WCS.spectral.pixel_to_world(0) gives 333 GHz (not
    // CRVAL3's 353 GHz, nor the RESTFRQ) and 851 um (the CD matrix's default CD3_3 of 1, not
    // CDELT3, which a CD matrix overrides).
    let v = fixture_json("fits/spectral.json");
    assert_eq!(v["astropy"], "8.0.2");
    let c = cairn::units::C_LIGHT;
    for (name, by_frequency) in [("squeeze_freq.fits", true), ("squeeze_wave.fits", false)] {
        let r = &v["files"][name];
        let reference = if by_frequency {
            c / nums(&r["frequency_hz"])[0]
        } else {
            nums(&r["wavelength_m"])[0]
        };
        let m = map::load(
            &fixture_path(&format!("fits/{name}")),
            &LoadOptions::default(),
        )
        .unwrap();
        assert_eq!(m.plane, None, "{name}: one plane, squeezed");
        let what = format!("{name} (astropy 8.0.2 WCS.spectral.pixel_to_world(0))");
        assert_close(
            m.wavelength_m.unwrap_or(f64::NAN),
            reference,
            1e-12,
            0.0,
            &what,
        );
        assert!(
            m.warnings.iter().all(|w| !w.contains("wavelength")),
            "{what}"
        );
    }
    let f = nums(&v["files"]["squeeze_freq.fits"]["frequency_hz"]);
    assert_eq!(f, vec![3.33e11]);
    // Without CRPIX3, the standard's default of 0 (astropy: 373 GHz, one step from CRVAL3's
    // 353 GHz), with a warning that says so.
    let r = &v["files"]["squeeze_nocrpix.fits"];
    let m = map::load(
        &fixture_path("fits/squeeze_nocrpix.fits"),
        &LoadOptions::default(),
    )
    .unwrap();
    assert_close(
        m.wavelength_m.unwrap_or(f64::NAN),
        c / nums(&r["frequency_hz"])[0],
        1e-12,
        0.0,
        "squeeze_nocrpix.fits (astropy 8.0.2 WCS.spectral.pixel_to_world(0))",
    );
    assert!(
        m.warnings.iter().any(|w| w.contains("CRPIX3 is missing")),
        "{:?}",
        m.warnings
    );
}

#[test]
fn inspect_reports_each_planes_frequency() {
    let d = tempfile::tempdir().unwrap();
    let cube = fixture_path("fits/cube_freq.fits");
    for (plane, ghz) in [
        ("0", "250.00 GHz"),
        ("1", "350.00 GHz"),
        ("2", "450.00 GHz"),
    ] {
        let o = cairn(
            &["inspect", cube.to_str().unwrap(), "--plane", plane],
            d.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        let line = o
            .stdout
            .lines()
            .find(|l| l.trim_start().starts_with("wavelength"))
            .unwrap_or_else(|| panic!("no wavelength line: {}", o.stdout));
        assert!(line.contains(ghz), "plane {plane}: {line}");
    }
}

#[test]
fn maps_and_cubes_without_a_spectral_plane_axis_are_unchanged() {
    // A squeezed FREQ axis without CRVAL3, and a VRAD cube: no wavelength, as before.
    let squeezed = map::load(
        &fixture_path("fits/squeeze3d.fits"),
        &LoadOptions::default(),
    )
    .unwrap();
    assert_eq!(squeezed.wavelength_m, None);
    let vrad = map::load(
        &fixture_path("fits/cube.fits"),
        &LoadOptions {
            plane: Some(2),
            ..LoadOptions::default()
        },
    )
    .unwrap();
    assert_eq!(vrad.wavelength_m, None);
}

#[test]
fn a_map_too_small_for_three_of_its_own_beams_says_so() {
    let d = tempfile::tempdir().unwrap();
    // 8 x 6" = 48", less than three 18" beams: no common resolution can work.
    write_map(d.path(), "tiny.fits", 8);
    let e = assert_refused(
        d.path(),
        &[
            "segment",
            "tiny.fits",
            "-o",
            "out",
            "--common-resolution",
            "0.03pc",
            "--distance",
            "300pc",
        ],
        &[
            "--common-resolution 0.03 pc at 300 pc",
            "tiny.fits is only 48.0\" x 48.0\"",
            "too small for any common resolution at this distance: give a larger map.",
        ],
    );
    assert!(!e.contains("at most"), "{e}");
}

/// The catalogue of a cube's plane says which plane it measured, as the run record does: the
/// parameter `plane` (zero-based, as `--plane`) in the CSV, the FITS table (an integer
/// keyword, FITS 4.0 section 4.2.3) and the VOTable (a `long` PARAM), and the plane's own
/// wavelength, the speed of light over the frequency astropy 8.0.2 gives that plane
/// (fixtures/fits/spectral.json, `WCS.spectral.pixel_to_world`).
#[test]
fn the_catalogue_of_a_cube_names_its_plane() {
    let d = tempfile::tempdir().unwrap();
    let cube = fixture_path("fits/cube_freq.fits");
    let reference = fixture_json("fits/spectral.json");
    let freq = nums(&reference["files"]["cube_freq.fits"]["frequency_hz"]);
    for plane in [1usize, 2] {
        let out = format!("p{plane}");
        let o = cairn(
            &[
                "segment",
                cube.to_str().unwrap(),
                "--plane",
                &plane.to_string(),
                "-o",
                &out,
                "--floor",
                "1",
                "--prominence",
                "1",
                "--min-area",
                "1px",
                "--noise",
                "1",
                "--temperature",
                "15K",
                "--no-figure",
                "-q",
            ],
            d.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        let dir = d.path().join(&out);
        let params = catalogue_files::checked_params(&dir, "structures");
        let find = |name: &str| {
            params
                .iter()
                .find(|(c, _, _)| c.name == name)
                .unwrap_or_else(|| panic!("no {name}"))
                .clone()
        };
        let (c, k, p) = find("plane");
        assert_eq!(c.value, plane.to_string());
        assert_eq!((k.key.as_str(), k.is_string), ("PLANE", false));
        assert_eq!(k.value, plane.to_string());
        assert_eq!(p.datatype, "long");
        let run: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(dir.join("run.json")).unwrap()).unwrap();
        assert_eq!(run["input"]["plane"], plane);
        let (c, _, _) = find("wavelength");
        assert_close(
            c.value.parse().unwrap(),
            cairn::units::C_LIGHT / freq[plane] * 1e6,
            1e-12,
            0.0,
            &format!("plane {plane}'s wavelength in um (astropy 8.0.2)"),
        );
    }
    // A map that is no cube has no plane to name.
    let o = cairn(
        &[
            "segment",
            fixture_path("segment/map.fits").to_str().unwrap(),
            "-o",
            "flat",
            "--noise",
            "1e20",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let params = catalogue_files::checked_params(&d.path().join("flat"), "structures");
    assert!(!params.iter().any(|(c, _, _)| c.name == "plane"));
}

//! `cairn inspect` (and `segment`, where they must agree) on headers that need care: a map
//! whose centre lies off the sky, a beam or a wavelength in the wrong unit, CTYPEs in lower
//! case or without a projection code, string values continued on CONTINUE cards. The FITS
//! files are assembled card by card (FITS Standard 4.0: 2880-byte blocks of 80-character
//! cards, big-endian data); reference values come from astropy 8.0.2 through fixtures/.

#[path = "common/cli.rs"]
mod cli;
mod common;

use cli::cairn;
use common::{fixture_json, fixture_path, num, nums};
use serde_json::Value;
use std::path::{Path, PathBuf};

/// A FITS file of `nx` x `ny` float pixels (a smooth invented pattern with noise-like
/// wiggles) and the header cards given.
fn write_map(dir: &Path, name: &str, nx: usize, ny: usize, cards: &[String]) -> PathBuf {
    write_map_with(dir, name, nx, ny, cards, |i| {
        ((i * 37) % 101) as f32 * 0.01 + ((i * 13) % 7) as f32
    })
}

/// As [`write_map`], with pixel `i` (row-major from the first) of value `value(i)`.
fn write_map_with(
    dir: &Path,
    name: &str,
    nx: usize,
    ny: usize,
    cards: &[String],
    value: impl Fn(usize) -> f32,
) -> PathBuf {
    let mut h = String::new();
    for c in [
        "SIMPLE  =                    T".to_string(),
        "BITPIX  =                  -32".to_string(),
        "NAXIS   =                    2".to_string(),
        format!("NAXIS1  = {nx:>20}"),
        format!("NAXIS2  = {ny:>20}"),
    ]
    .iter()
    .chain(cards)
    {
        h.push_str(&format!("{c:<80}"));
    }
    h.push_str(&format!("{:<80}", "END"));
    while !h.len().is_multiple_of(2880) {
        h.push(' ');
    }
    let mut bytes = h.into_bytes();
    for i in 0..nx * ny {
        bytes.extend_from_slice(&value(i).to_be_bytes());
    }
    while !bytes.len().is_multiple_of(2880) {
        bytes.push(0);
    }
    let p = dir.join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

/// `inspect --json` of `path` with `extra` options: the summary.
fn inspect_json(dir: &Path, path: &Path, extra: &[&str]) -> Value {
    let mut args = vec!["inspect", path.to_str().unwrap(), "--json"];
    args.extend_from_slice(extra);
    let o = cairn(&args, dir);
    assert_eq!(o.code, 0, "{}", o.stderr);
    serde_json::from_str(&o.stdout).unwrap()
}

fn warnings(s: &Value) -> Vec<String> {
    s["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap().to_string())
        .collect()
}

fn fixture_cards(e: &Value) -> Vec<String> {
    e["cards"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .filter(|c| !c.starts_with("NAXIS"))
        .collect()
}

#[test]
fn a_map_whose_centre_is_off_the_sky_keeps_its_frame_scale_and_beam() {
    // Source: astropy 8.0.2 astropy.wcs (fixtures/wcs/scale_pixel.json): the pixel where the
    // scales are taken, its position, and the stencil's pixel scales and solid angle there.
    // inspect reports the frame and projection, says why the centre is missing, gives the
    // scale at that pixel and says which it is; the beam in pixels (pi/(4 ln 2) major minor
    // over the pixel's solid angle, a Gaussian beam) and the suggested --min-area (one
    // beam, rounded up) follow from it.
    let dir = tempfile::tempdir().unwrap();
    let f = fixture_json("wcs/scale_pixel.json");
    for (name, e, code) in [
        ("ait", &f["maps"]["ait_centre_off_sky"], "AIT"),
        ("hpx", &f["maps"]["hpx_centre_off_sky"], "HPX"),
    ] {
        let (nx, ny) = (num(&e["nx"]) as usize, num(&e["ny"]) as usize);
        let mut cards = fixture_cards(e);
        cards.push("BUNIT   = 'MJy/sr'".into());
        cards.push("BMAJ    =                  3.0".into());
        let path = write_map(dir.path(), &format!("{name}.fits"), nx, ny, &cards);
        let s = inspect_json(dir.path(), &path, &[]);
        let sky = &s["sky"];
        assert_eq!(sky["frame"], "galactic", "{name}");
        assert_eq!(sky["projection"], code, "{name}");
        assert!(sky["centre_lon_deg"].is_null(), "{name}");
        assert!(
            sky["why_none"].as_str().unwrap().contains(&format!(
                "lies off the sky (outside the {code} projection's domain)"
            )),
            "{name}: {sky}"
        );
        let at = nums(&sky["scale_pixel"]);
        assert_eq!(at, nums(&e["scale_pixel"]), "{name}");
        let pos = nums(&sky["scale_pixel_lon_lat_deg"]);
        assert!(
            (pos[0] - num(&e["lon"])).abs() < 1e-9 && (pos[1] - num(&e["lat"])).abs() < 1e-9,
            "{name}: {pos:?}"
        );
        let scale = nums(&sky["pixel_scale_arcsec"]);
        for (got, want) in scale
            .iter()
            .zip([num(&e["scale_x_deg"]), num(&e["scale_y_deg"])])
        {
            assert!(
                (got / (want * 3600.0) - 1.0).abs() < 1e-8,
                "{name}: {scale:?}"
            );
        }
        let sr = num(&e["solid_angle_sr"]);
        assert!((num(&sky["pixel_solid_angle_sr"]) / sr - 1.0).abs() < 1e-8);
        let beam_sr =
            std::f64::consts::PI / (4.0 * std::f64::consts::LN_2) * 3f64.to_radians().powi(2);
        let area = num(&s["beam"]["area_px"]);
        assert!((area / (beam_sr / sr) - 1.0).abs() < 1e-8, "{name}: {area}");
        assert_eq!(
            num(&s["suggested"]["min_area_px"]),
            (area - 1e-9).ceil(),
            "{name}"
        );
        // segment takes the same default --min-area there (not 1 px from a solid angle
        // measured off the sky).
        let out = dir.path().join(format!("run-{name}"));
        let o = cairn(
            &[
                "segment",
                path.to_str().unwrap(),
                "-o",
                out.to_str().unwrap(),
                "-q",
                "--no-figure",
                "--floor",
                "0",
                "--prominence",
                "1",
            ],
            dir.path(),
        );
        assert_eq!(o.code, 0, "{name}: {}", o.stderr);
        let run: Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("run.json")).unwrap()).unwrap();
        assert_eq!(
            num(&run["parameters"]["min_area"]["value"]),
            num(&s["suggested"]["min_area_px"]),
            "{name}"
        );
        let w = warnings(&s);
        assert!(
            w.iter().any(|w| w.contains("lies off the sky")
                && w.contains(&format!("pixel ({}, {})", at[0], at[1]))),
            "{name}: {w:?}"
        );
        // The text says the same, with the pixel named.
        let o = cairn(&["inspect", path.to_str().unwrap()], dir.path());
        assert_eq!(o.code, 0);
        assert!(
            o.stdout.contains(&format!("galactic, {code} projection"))
                && o.stdout
                    .contains(&format!("at pixel ({}, {})", at[0], at[1]))
                && o.stdout.contains("pixels per beam"),
            "{name}: {}",
            o.stdout
        );
    }
}

#[test]
fn inspect_says_what_segment_says_of_a_beam_larger_than_the_map() {
    // A stated property: BMAJ is in degrees (FITS practice for BMAJ/BMIN); a beam of 14
    // (arcsec meant) covers more than a 40 x 30 map of 6" pixels. segment refuses the map,
    // with or without a --min-area of its own (every size, error and state would be wrong);
    // inspect suggests no --min-area and says the same sentence (from the one rule both
    // use), with the reading in degrees named.
    let dir = tempfile::tempdir().unwrap();
    let cards: Vec<String> = [
        "CTYPE1  = 'RA---TAN'",
        "CTYPE2  = 'DEC--TAN'",
        "CRPIX1  =                 20.5",
        "CRPIX2  =                 15.5",
        "CRVAL1  =                 83.0",
        "CRVAL2  =                 -5.0",
        "CDELT1  =  -0.0016666666666667",
        "CDELT2  =   0.0016666666666667",
        "BUNIT   = 'cm-2    '",
        "BMAJ    =                 14.0",
        "BMIN    =                 14.0",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let path = write_map(dir.path(), "bmaj.fits", 40, 30, &cards);
    let s = inspect_json(dir.path(), &path, &[]);
    assert!(
        s["suggested"]["min_area_px"].is_null(),
        "{}",
        s["suggested"]
    );
    let w = warnings(&s);
    let said = w
        .iter()
        .find(|w| w.starts_with("segment refuses this map as it is"))
        .unwrap_or_else(|| panic!("{w:?}"));
    assert!(
        said.contains("BMAJ and BMIN are in degrees") && said.contains("14 deg is 50400\""),
        "{said}"
    );
    let out = dir.path().join("run");
    for extra in [None, Some("11px")] {
        let mut args = vec![
            "segment",
            path.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "-q",
        ];
        if let Some(a) = extra {
            args.extend_from_slice(&["--min-area", a]);
        }
        let o = cairn(&args, dir.path());
        assert_eq!(o.code, 2, "{}", o.stderr);
        assert!(!out.exists(), "nothing written");
        // The refusal's words are inspect's, the reading of BMAJ in degrees included.
        let core = "one beam (";
        let start = o.stderr.find(core).expect("segment's sentence");
        let end = o.stderr.trim_end().trim_end_matches('.').len();
        assert!(
            said.contains(&o.stderr[start..end]),
            "{said} / {}",
            o.stderr
        );
    }
    let text = cairn(&["inspect", path.to_str().unwrap()], dir.path()).stdout;
    assert!(text.contains("no --min-area"), "{text}");
}

#[test]
fn wavelengths_in_the_wrong_unit_are_not_used() {
    // Sources: astropy 8.0.2 astropy.units (fixtures/header/wavelength_units.json: 850000 nm
    // is 850 um); a stated property for the rest: RESTFRQ is in Hz (FITS WCS Paper III), so
    // 230 gives 1303 km, outside 1 um to 10 m, and is not used, with a warning naming the
    // keyword and the fix.
    let dir = tempfile::tempdir().unwrap();
    let f = fixture_json("header/wavelength_units.json");
    let nm = f["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["unit"] == "nm" && !c["metres"].is_null())
        .unwrap();
    let card = nm["card"].as_str().unwrap().to_string();
    let path = write_map(
        dir.path(),
        "nm.fits",
        20,
        20,
        &["BUNIT   = 'MJy/sr'".into(), card],
    );
    let s = inspect_json(dir.path(), &path, &[]);
    let um = num(&s["wavelength"]["wavelength_um"]);
    assert!(
        (um / (num(&nm["metres"]) * 1e6) - 1.0).abs() < 1e-12,
        "{um}"
    );

    let path = write_map(
        dir.path(),
        "ghz.fits",
        20,
        20,
        &[
            "BUNIT   = 'MJy/sr'".into(),
            "RESTFRQ =                230.0".into(),
        ],
    );
    let s = inspect_json(dir.path(), &path, &["--temperature", "15K"]);
    assert!(s["wavelength"].is_null());
    assert!(s["conversion"]["column_per_unit_cm2"].is_null());
    let w = warnings(&s);
    assert!(
        w.iter().any(
            |w| w.starts_with("RESTFRQ = 230 Hz gives a wavelength of 1303 km")
                && w.contains("--wavelength 230GHz")
        ),
        "{w:?}"
    );
    // 1e16 Hz (30 nm) read as GHz would be no better (3e-8 um): no such hint.
    let path = write_map(
        dir.path(),
        "uv.fits",
        20,
        20,
        &[
            "BUNIT   = 'MJy/sr'".into(),
            "RESTFRQ =              1.0E+16".into(),
        ],
    );
    let w = warnings(&inspect_json(dir.path(), &path, &[]));
    let said = w
        .iter()
        .find(|w| w.starts_with("RESTFRQ = 1e16 Hz gives a wavelength of"))
        .unwrap_or_else(|| panic!("{w:?}"));
    assert!(!said.contains("GHz was meant"), "{said}");
}

#[test]
fn ctypes_in_lower_case_or_without_a_projection_code() {
    // Source: astropy 8.0.2 astropy.wcs (fixtures/header/ctype_case.json): it refuses
    // 'ra---tan' and reads 'RA---TAN'. cairn reads the lower-case map, says so, and writes
    // labels.fits with the upper-case cards astropy reads. CTYPEs 'RA'/'DEC' are read as
    // WCSLIB reads them (linear axes; positions checked in tests/wcs_astropy.rs) with a
    // warning; 'RA---'/'DEC--' give no WCS and a warning saying why and what to set.
    let dir = tempfile::tempdir().unwrap();
    let f = fixture_json("header/ctype_case.json");
    let upper: Vec<String> = f["upper"]["ctype"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .collect();
    let mut cards = fixture_cards(&f["lower"]);
    cards.push("BUNIT   = 'cm-2    '".into());
    let path = write_map(dir.path(), "lower.fits", 60, 40, &cards);
    let s = inspect_json(dir.path(), &path, &[]);
    assert_eq!(s["sky"]["projection"], "TAN");
    assert!(
        warnings(&s).iter().any(|w| w.contains("are in lower case")),
        "{:?}",
        warnings(&s)
    );
    let out = dir.path().join("run");
    let o = cairn(
        &[
            "segment",
            path.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "--floor",
            "3",
            "--prominence",
            "1",
            "--min-area",
            "4px",
            "--no-figure",
            "-q",
        ],
        dir.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let bytes = std::fs::read(out.join("labels.fits")).unwrap();
    let header = cairn::header::Header::parse_bytes(&bytes[..2880 * 2]);
    for (i, want) in upper.iter().enumerate() {
        assert_eq!(
            header.get_str(&format!("CTYPE{}", i + 1)),
            Some(want.as_str())
        );
        let image = header
            .to_card_images()
            .into_iter()
            .find(|c| c.starts_with(&format!("CTYPE{}  = '{want}", i + 1)));
        assert!(image.is_some(), "CTYPE{} card", i + 1);
    }

    let sky = |c1: &str, c2: &str| -> Vec<String> {
        vec![
            format!("CTYPE1  = '{c1}'"),
            format!("CTYPE2  = '{c2}'"),
            "CRPIX1  =                 10.5".into(),
            "CRPIX2  =                 10.5".into(),
            "CRVAL1  =                 83.0".into(),
            "CRVAL2  =                 -5.0".into(),
            "CDELT1  =               -0.002".into(),
            "CDELT2  =                0.002".into(),
            "BUNIT   = 'cm-2    '".into(),
        ]
    };
    let path = write_map(dir.path(), "linear.fits", 20, 20, &sky("RA", "DEC"));
    let s = inspect_json(dir.path(), &path, &[]);
    assert_eq!(s["sky"]["projection"], "linear");
    assert!(
        warnings(&s)
            .iter()
            .any(|w| w.starts_with("CTYPE1 = 'RA' and CTYPE2 = 'DEC' carry no projection code")),
        "{:?}",
        warnings(&s)
    );
    let path = write_map(dir.path(), "hyphens.fits", 20, 20, &sky("RA---", "DEC--"));
    let s = inspect_json(dir.path(), &path, &[]);
    assert!(s["sky"].is_null());
    assert!(
        warnings(&s).iter().any(|w| w.starts_with(
            "CTYPE1 = 'RA---' names a sky coordinate but no projection code after its hyphens"
        ) && w.contains("'RA---TAN' and 'DEC--TAN'")),
        "{:?}",
        warnings(&s)
    );
}

#[test]
fn long_strings_and_long_extension_names_through_the_command_line() {
    // Source: astropy 8.0.2 astropy.io.fits (fixtures/header/long_strings.json): BUNIT
    // 'MJy/&' + CONTINUE 'sr' reads 'MJy/sr'; an EXTNAME of 74 characters, written by astropy
    // on CONTINUE cards, is chosen by --hdu NAME.
    let dir = tempfile::tempdir().unwrap();
    let f = fixture_json("header/long_strings.json");
    let path = fixture_path("header/long_strings.fits");
    let s = inspect_json(dir.path(), &path, &[]);
    assert_eq!(s["unit"], f["hdus"][0]["bunit"]);
    assert_eq!(s["unit_kind"], "surface brightness");
    let long = f["hdus"][1]["extname"].as_str().unwrap();
    let s = inspect_json(dir.path(), &path, &["--hdu", long]);
    assert_eq!(s["hdu"], 1);
    assert_eq!(s["hdu_name"], long);
}

/// Celestial header cards of a TAN map centred on its middle pixel, pixels `cdelt` degrees
/// (None: no CDELT cards), with the extra cards given.
fn sky_cards(nx: usize, ny: usize, cdelt: Option<(f64, f64)>, extra: &[&str]) -> Vec<String> {
    let mut c = vec![
        "CTYPE1  = 'RA---TAN'".to_string(),
        "CTYPE2  = 'DEC--TAN'".to_string(),
        format!("CRPIX1  = {:>20}", (nx as f64 + 1.0) / 2.0),
        format!("CRPIX2  = {:>20}", (ny as f64 + 1.0) / 2.0),
        "CRVAL1  =                 71.5".to_string(),
        "CRVAL2  =                 22.0".to_string(),
        "BUNIT   = 'Jy/beam '".to_string(),
    ];
    if let Some((a, b)) = cdelt {
        c.push(format!("CDELT1  = {:>20}", -a));
        c.push(format!("CDELT2  = {b:>20}"));
    }
    c.extend(extra.iter().map(|s| s.to_string()));
    c
}

/// A pseudo-random value in [-0.5, 0.5) of pixel `i` (a fixed integer hash).
fn wiggle(i: usize) -> f32 {
    let h = (i as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 40;
    (h % 1000) as f32 / 1000.0 - 0.5
}

/// A header case: file name, pixel sides in degrees (None: no CDELT), extra cards, and the
/// warnings it must get.
type Case<'a> = (&'a str, Option<(f64, f64)>, &'a [&'a str], &'a [&'a str]);

/// Headers that are wrong in ways every pixel would inherit are warned about, by inspect and
/// by segment alike: no CDELT (FITS then takes 1 degree per pixel, as WCSLIB does: common
/// practice to read, almost never meant), a beam covering less than a pixel, and BMAJ = 0
/// (read as no beam rather than refused). A sound header gets none of these warnings.
#[test]
fn missing_pixel_sizes_undersampled_beams_and_zero_beams_are_said() {
    let dir = tempfile::tempdir().unwrap();
    let (nx, ny) = (40, 30);
    // Each case with the warnings it gets: a map without CDELT has 1-degree pixels, under
    // which the 18" beam is undersampled too.
    let cases: [Case; 4] = [
        (
            "sound.fits",
            Some((6.0 / 3600.0, 6.0 / 3600.0)),
            &[
                "BMAJ    =                0.005",
                "BMIN    =                0.005",
            ],
            &[],
        ),
        (
            "nocdelt.fits",
            None,
            &[
                "BMAJ    =                0.005",
                "BMIN    =                0.005",
            ],
            &[
                "gives no CDELT1 or CDELT2 (nor a CD matrix)",
                "covers less than a pixel",
            ],
        ),
        (
            "undersampled.fits",
            Some((6.0 / 3600.0, 6.0 / 3600.0)),
            &[
                "BMAJ    =    0.001388888888889",
                "BMIN    =   0.0011111111111111",
            ],
            &["covers less than a pixel"],
        ),
        (
            "zerobeam.fits",
            Some((6.0 / 3600.0, 6.0 / 3600.0)),
            &[
                "BMAJ    =                  0.0",
                "BMIN    =                  0.0",
            ],
            &["the header's BMAJ is 0, which says the beam is not known"],
        ),
    ];
    let all = [
        "gives no CDELT",
        "covers less than a pixel",
        "the header's BMAJ is 0",
    ];
    for (name, cdelt, extra, expect) in cases {
        let path = write_map(dir.path(), name, nx, ny, &sky_cards(nx, ny, cdelt, extra));
        let s = inspect_json(dir.path(), &path, &[]);
        let w = warnings(&s);
        for phrase in all {
            let said = w.iter().any(|x| x.contains(phrase));
            assert_eq!(
                said,
                expect.iter().any(|e| e.contains(phrase)),
                "{name}: {w:?}"
            );
        }
        if name == "zerobeam.fits" {
            assert!(s["beam"].is_null(), "{}", s["beam"]);
        }
        // segment says the same on stderr.
        let out = dir.path().join(format!("run-{name}"));
        let o = cairn(
            &[
                "segment",
                path.to_str().unwrap(),
                "-o",
                out.to_str().unwrap(),
                "-q",
                "--no-figure",
                "--floor",
                "3",
                "--prominence",
                "0.5",
            ],
            dir.path(),
        );
        assert_eq!(o.code, 0, "{name}: {}", o.stderr);
        for e in expect {
            assert!(o.stderr.contains(e), "{name}: {}", o.stderr);
        }
    }
}

/// A zero-filled border is said, with the fix; `--missing-value 0` reads those pixels as
/// missing, after which the noise estimate is the one of the same map with NaN there (the
/// same pixels measured), segment records the value in its run record and `draw` reads the
/// map again the same way; a value no pixel has is said, and one that is no number refused.
#[test]
fn a_zero_filled_border_is_said_and_missing_value_reads_it_as_missing() {
    let dir = tempfile::tempdir().unwrap();
    let (nx, ny) = (60, 50);
    let cards = sky_cards(
        nx,
        ny,
        Some((6.0 / 3600.0, 6.0 / 3600.0)),
        &[
            "BMAJ    =                0.005",
            "BMIN    =                0.005",
        ],
    );
    // The left 15 columns (25% of the pixels) are zero, or NaN.
    let border = |i: usize| i % nx < 15;
    let zeros = write_map_with(dir.path(), "zeros.fits", nx, ny, &cards, |i| {
        if border(i) { 0.0 } else { 1.0 + wiggle(i) }
    });
    let nans = write_map_with(dir.path(), "nans.fits", nx, ny, &cards, |i| {
        if border(i) { f32::NAN } else { 1.0 + wiggle(i) }
    });
    let s = inspect_json(dir.path(), &zeros, &[]);
    let w = warnings(&s);
    assert!(
        w.iter().any(
            |x| x.contains("750 of the map's 3000 measured pixels (25.0%) are exactly 0")
                && x.contains("give --missing-value 0")
        ),
        "{w:?}"
    );
    let m = inspect_json(dir.path(), &zeros, &["--missing-value", "0"]);
    assert!(
        warnings(&m).iter().all(|x| !x.contains("are exactly 0")),
        "{:?}",
        warnings(&m)
    );
    assert_eq!(m["values"]["n_missing"], 750);
    let n = inspect_json(dir.path(), &nans, &[]);
    assert_eq!(m["noise"], n["noise"]);
    assert_ne!(s["noise"]["sigma"], n["noise"]["sigma"]);
    // segment records it; draw reads the map again the same way.
    let o = cairn(
        &[
            "segment",
            zeros.to_str().unwrap(),
            "-o",
            "run",
            "-q",
            "--missing-value",
            "0",
            "--floor",
            "1.2",
            "--prominence",
            "0.2",
        ],
        dir.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!o.stderr.contains("are exactly 0"), "{}", o.stderr);
    let run: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("run/run.json")).unwrap())
            .unwrap();
    assert_eq!(run["input"]["missing_value"], 0.0);
    let o = cairn(&["draw", "run", "-o", "again"], dir.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    // The same figure as segment's, so the same pixels missing (read as data, the zeros
    // would change the colour limits and the panel).
    let png = |p: &str| std::fs::read(dir.path().join(p)).unwrap();
    assert!(png("run/overlay.png") == png("again/overlay.png"));
    // A value no pixel has; a value that is no number.
    let v = inspect_json(dir.path(), &nans, &["--missing-value", "-999"]);
    assert!(
        warnings(&v)
            .iter()
            .any(|x| x.contains("no pixel of the map has the value --missing-value -999")),
        "{:?}",
        warnings(&v)
    );
    let o = cairn(
        &[
            "inspect",
            zeros.to_str().unwrap(),
            "--missing-value",
            "zero",
        ],
        dir.path(),
    );
    assert_eq!(o.code, 2);
    assert!(
        o.stderr
            .contains("--missing-value 'zero' is not a finite number"),
        "{}",
        o.stderr
    );
}

/// On pixels of unequal sides the beam's sizes in pixels are in sides of a square pixel of the
/// same area, so that pi/(4 ln 2) major minor is the pixels per beam, and the text says so;
/// a galactic map's centre is named l and b.
#[test]
fn beams_on_unequal_pixels_and_galactic_centres_read_right() {
    let dir = tempfile::tempdir().unwrap();
    let (nx, ny) = (40, 30);
    let cards = sky_cards(
        nx,
        ny,
        Some((4.0 / 3600.0, 8.0 / 3600.0)),
        &[
            "BMAJ    =                0.005",
            "BMIN    =                0.005",
        ],
    );
    let path = write_map(dir.path(), "oblong.fits", nx, ny, &cards);
    let s = inspect_json(dir.path(), &path, &[]);
    let b = &s["beam"];
    let (a, m, area) = (num(&b["major_px"]), num(&b["minor_px"]), num(&b["area_px"]));
    // The beam's area (FWHM^2 pi / (4 ln 2), the Gaussian's solid angle) over the pixel's.
    let expect = std::f64::consts::PI / (4.0 * 2f64.ln()) * a * m;
    assert!((expect / area - 1.0).abs() < 1e-9, "{a} {m} {area}");
    let text = cairn(&["inspect", path.to_str().unwrap()], dir.path()).stdout;
    assert!(text.contains("(in pixels of the same area"), "{text}");
    // Sheared pixels (a CD matrix whose columns are not at right angles): the sides' product
    // is not the pixel's area, and the sizes still agree with the pixels per beam.
    let sheared = sky_cards(
        nx,
        ny,
        None,
        &[
            "CD1_1   = -0.0016666666666667",
            "CD1_2   =  0.0008333333333333",
            "CD2_1   =                  0.0",
            "CD2_2   =  0.0016666666666667",
            "BMAJ    =                0.005",
            "BMIN    =                0.005",
        ],
    );
    let path = write_map(dir.path(), "sheared.fits", nx, ny, &sheared);
    let s = inspect_json(dir.path(), &path, &[]);
    let b = &s["beam"];
    let (a, m, area) = (num(&b["major_px"]), num(&b["minor_px"]), num(&b["area_px"]));
    let expect = std::f64::consts::PI / (4.0 * 2f64.ln()) * a * m;
    assert!((expect / area - 1.0).abs() < 1e-9, "{a} {m} {area}");
    // In sides of the pixel's own lengths the sizes would not agree with the area.
    let p = nums(&s["sky"]["pixel_scale_arcsec"]);
    let by_sides = num(&b["major_arcsec"]) / (p[0] * p[1]).sqrt();
    assert!((by_sides / a - 1.0).abs() > 0.05, "{by_sides} {a}");
    // Galactic axes: l and b named, not the same degrees twice.
    let gal: Vec<String> = cards
        .iter()
        .map(|c| {
            c.replace("'RA---TAN'", "'GLON-TAN'")
                .replace("'DEC--TAN'", "'GLAT-TAN'")
        })
        .collect();
    let path = write_map(dir.path(), "gal.fits", nx, ny, &gal);
    let text = cairn(&["inspect", path.to_str().unwrap()], dir.path()).stdout;
    let centre = text.lines().find(|l| l.starts_with("centre")).unwrap();
    assert!(
        centre.contains("l = 71.5") && centre.contains(", b = +22.0"),
        "{centre}"
    );
    assert_eq!(centre.matches("71.5").count(), 1, "{centre}");
}

/// Frequency keywords that disagree (a line's rest frequency beside the continuum's) are said,
/// naming the one taken (RESTFRQ, the first of RESTFRQ, RESTFREQ, FREQ and OBSFREQ, as
/// cairn reads them); one keyword alone, or two that agree, are read without a word.
#[test]
fn disagreeing_frequency_keywords_are_said() {
    let dir = tempfile::tempdir().unwrap();
    let (nx, ny) = (40, 30);
    let cases: [(&str, &[&str], bool); 3] = [
        ("one.fits", &["RESTFRQ =          2.305380E11"], false),
        (
            "agree.fits",
            &[
                "RESTFRQ =          2.305380E11",
                "OBSFREQ =          2.305380E11",
            ],
            false,
        ),
        (
            "differ.fits",
            &[
                "RESTFRQ =          2.305380E11",
                "OBSFREQ =             3.45E11",
            ],
            true,
        ),
    ];
    for (name, extra, warned) in cases {
        let cards = sky_cards(nx, ny, Some((6.0 / 3600.0, 6.0 / 3600.0)), extra);
        let path = write_map(dir.path(), name, nx, ny, &cards);
        let s = inspect_json(dir.path(), &path, &[]);
        // c / 230.538 GHz = 1300.4 um (c = 299792458 m/s, SI definition).
        let um = num(&s["wavelength"]["wavelength_um"]);
        assert!((um - 1300.4046).abs() < 1e-3, "{name}: {um}");
        let said: Vec<String> = warnings(&s)
            .into_iter()
            .filter(|w| w.contains("cairn takes RESTFRQ"))
            .collect();
        assert_eq!(said.len(), warned as usize, "{name}: {said:?}");
        if warned {
            assert!(
                said[0].contains("RESTFRQ = 230.538 GHz and OBSFREQ = 345 GHz"),
                "{}",
                said[0]
            );
        }
    }
}

/// A beam or a wavelength given on the command line that replaces a different one in the
/// header is said (as --unit's replacement is); one equal to the header's is not; the text
/// says where the wavelength came from. A Stokes cube's hint names the plane of Stokes I
/// (value 1, FITS WCS paper I, Greisen & Calabretta 2002, table 7).
#[test]
fn replaced_beams_and_wavelengths_are_said_and_stokes_i_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let (nx, ny) = (40, 30);
    let cards = sky_cards(
        nx,
        ny,
        Some((6.0 / 3600.0, 6.0 / 3600.0)),
        &[
            "BMAJ    =                0.005",
            "BMIN    =                0.005",
            "RESTFRQ =          3.52697E11",
        ],
    );
    let path = write_map(dir.path(), "m.fits", nx, ny, &cards);
    let said = |extra: &[&str], what: &str| -> bool {
        warnings(&inspect_json(dir.path(), &path, extra))
            .iter()
            .any(|w| w.contains(what))
    };
    assert!(said(
        &["--beam", "20arcsec"],
        "--beam (20\" x 20\") replaces the header's beam (18\" x 18\")"
    ));
    assert!(!said(&["--beam", "18arcsec"], "replaces the header's beam"));
    assert!(said(
        &["--wavelength", "1.1mm"],
        "--wavelength (1.1 mm) replaces the header's (850 um)"
    ));
    assert!(!said(
        &["--wavelength", "352.697GHz"],
        "replaces the header's ("
    ));
    let text = cairn(
        &["inspect", path.to_str().unwrap(), "--wavelength", "1.1mm"],
        dir.path(),
    )
    .stdout;
    assert!(text.contains("(from --wavelength)"), "{text}");
    // A cube along a Stokes axis whose planes are I, Q, U, V (CRVAL3 = 1, CDELT3 = 1), and
    // one that starts at Q (CRVAL3 = 2): I is plane 0, and no plane of the second.
    for (crval, expect) in [("1.0", Some(0)), ("2.0", None)] {
        let mut h = String::new();
        for c in [
            "SIMPLE  =                    T".to_string(),
            "BITPIX  =                  -32".to_string(),
            "NAXIS   =                    3".to_string(),
            "NAXIS1  =                    8".to_string(),
            "NAXIS2  =                    6".to_string(),
            "NAXIS3  =                    4".to_string(),
            "CTYPE3  = 'STOKES  '".to_string(),
            format!("CRVAL3  = {crval:>20}"),
            "CRPIX3  =                  1.0".to_string(),
            "CDELT3  =                  1.0".to_string(),
            "END".to_string(),
        ] {
            h.push_str(&format!("{c:<80}"));
        }
        while !h.len().is_multiple_of(2880) {
            h.push(' ');
        }
        let mut bytes = h.into_bytes();
        bytes.extend(vec![0u8; 8 * 6 * 4 * 4]);
        while !bytes.len().is_multiple_of(2880) {
            bytes.push(0);
        }
        let p = dir.path().join(format!("stokes{crval}.fits"));
        std::fs::write(&p, bytes).unwrap();
        let o = cairn(&["inspect", p.to_str().unwrap()], dir.path());
        assert_eq!(o.code, 2, "{}", o.stderr);
        match expect {
            Some(k) => assert!(
                o.stderr
                    .contains(&format!("Stokes I (total intensity) being plane {k}")),
                "{}",
                o.stderr
            ),
            None => assert!(!o.stderr.contains("Stokes I"), "{}", o.stderr),
        }
    }
}

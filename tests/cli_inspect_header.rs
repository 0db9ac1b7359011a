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
        let v = ((i * 37) % 101) as f32 * 0.01 + ((i * 13) % 7) as f32;
        bytes.extend_from_slice(&v.to_be_bytes());
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
    // (arcsec meant) covers more than a 40 x 30 map of 6" pixels. segment refuses its
    // default --min-area of one beam; inspect suggests none and says the same sentence
    // (from the one rule both use), with the reading in degrees named.
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
        .find(|w| w.starts_with("segment refuses its default minimum area"))
        .unwrap_or_else(|| panic!("{w:?}"));
    assert!(
        said.contains("BMAJ and BMIN are in degrees") && said.contains("14 deg is 50400\""),
        "{said}"
    );
    let out = dir.path().join("run");
    let o = cairn(
        &[
            "segment",
            path.to_str().unwrap(),
            "-o",
            out.to_str().unwrap(),
            "-q",
        ],
        dir.path(),
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(!out.exists(), "nothing written");
    // The refusal's words are inspect's, the reading of BMAJ in degrees included.
    let core = "the default --min-area, one beam (";
    let start = o.stderr.find(core).expect("segment's sentence");
    let end = o.stderr.trim_end().trim_end_matches('.').len();
    assert!(
        said.contains(&o.stderr[start..end]),
        "{said} / {}",
        o.stderr
    );
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

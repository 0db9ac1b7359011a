//! Map loading checked against astropy: every BITPIX with BSCALE/BZERO/BLANK, extensions,
//! squeezed axes and cube planes.
//!
//! Reference: the FITS files and the values in fixtures/fits/ are written and read back by
//! astropy 8.0.2 astropy.io.fits (tests/oracle/fits_astropy.py). cairn holds pixels as 32-bit
//! floats, so each astropy value is compared after rounding to f32.

mod common;

use cairn::map::{self, HduChoice, LoadOptions};
use common::{fixture_json, fixture_path, num, nums};

fn opts() -> LoadOptions {
    LoadOptions::default()
}

fn assert_same_pixels(data: &ndarray::Array2<f32>, reference: &[f64], what: &str) {
    assert_eq!(data.len(), reference.len(), "{what}: pixel count");
    for (i, (a, b)) in data.iter().zip(reference).enumerate() {
        if b.is_nan() {
            assert!(
                a.is_nan(),
                "{what}: pixel {i} should be missing, cairn read {a}"
            );
        } else {
            // astropy 8.0.2 value rounded to f32, since cairn stores f32.
            assert_eq!(*a, *b as f32, "{what}: pixel {i}");
        }
    }
}

#[test]
fn every_bitpix_reads_as_astropy_reads_it() {
    let v = fixture_json("fits/values.json");
    for bitpix in [8, 16, 32, 64, -32, -64] {
        let name = format!("bitpix_{bitpix}.fits");
        let reference = &v["files"][&name];
        let m = map::load(&fixture_path(&format!("fits/{name}")), &opts()).unwrap();
        assert_eq!(m.bitpix, bitpix);
        let shape = nums(&reference["shape"]);
        assert_eq!((m.ny(), m.nx()), (shape[0] as usize, shape[1] as usize));
        let values = nums(&reference["values"]);
        assert_same_pixels(&m.data, &values, &name);
        let n_missing = values.iter().filter(|x| x.is_nan()).count();
        assert!(n_missing >= 2, "{name}: the fixture has missing pixels");
        assert_eq!(
            m.missing_count(),
            n_missing,
            "{name}: missing pixels (BLANK/NaN) kept as a mask"
        );
    }
}

#[test]
fn extensions_are_found_by_default_index_and_name() {
    let v = fixture_json("fits/values.json");
    let r = &v["files"]["extensions.fits"];
    let path = fixture_path("fits/extensions.fits");
    // Default: the primary HDU is empty, so the first image extension with data.
    let m = map::load(&path, &opts()).unwrap();
    assert_eq!(m.hdu_index, 1);
    assert_eq!(m.hdu_name.as_deref(), Some("SIGNAL"));
    assert_same_pixels(&m.data, &nums(&r["hdu1"]), "default HDU");
    let m = map::load(
        &path,
        &LoadOptions {
            hdu: HduChoice::Name("error".into()),
            ..opts()
        },
    )
    .unwrap();
    assert_eq!(m.hdu_index, 2);
    assert_same_pixels(&m.data, &nums(&r["hdu2"]), "--hdu ERROR");
    let m = map::load(
        &path,
        &LoadOptions {
            hdu: HduChoice::Index(2),
            ..opts()
        },
    )
    .unwrap();
    assert_same_pixels(&m.data, &nums(&r["hdu2"]), "--hdu 2");
    let e = map::load(
        &path,
        &LoadOptions {
            hdu: HduChoice::Name("NOPE".into()),
            ..opts()
        },
    )
    .unwrap_err();
    assert!(
        e.message.contains("no HDU named 'NOPE'") && e.message.contains("SIGNAL"),
        "{e}"
    );
    let e = map::load(
        &path,
        &LoadOptions {
            hdu: HduChoice::Index(5),
            ..opts()
        },
    )
    .unwrap_err();
    assert!(e.message.contains("has 3 HDUs"), "{e}");
    // Two images and no --hdu: the first is read, and a warning names both and the option.
    let m = map::load(&path, &opts()).unwrap();
    assert!(
        m.warnings.iter().any(|w| w.contains(
            "holds 2 images (HDU 1: 7 x 5, HDU 2: 7 x 5); the first, HDU 1 (7 x 5), was read: choose another with --hdu"
        )),
        "{:?}",
        m.warnings
    );
    let m = map::load(
        &path,
        &LoadOptions {
            hdu: HduChoice::Index(1),
            ..opts()
        },
    )
    .unwrap();
    assert!(
        !m.warnings.iter().any(|w| w.contains("images")),
        "{:?}",
        m.warnings
    );
}

/// Without --hdu, a one-dimensional array (a spectrum, a list of values) before the image is
/// passed over: the first HDU of two axes or more longer than one pixel is the map.
#[test]
fn a_one_dimensional_extension_before_the_image_is_passed_over() {
    use fitsio::images::{ImageDescription, ImageType};
    let d = tempfile::tempdir().unwrap();
    let path = d.path().join("spectrum-then-map.fits");
    {
        let mut f = fitsio::FitsFile::create(&path).open().unwrap();
        let line = f
            .create_image(
                "LINE",
                &ImageDescription {
                    data_type: ImageType::Float,
                    dimensions: &[16],
                },
            )
            .unwrap();
        line.write_image(&mut f, &[1.0f32; 16]).unwrap();
        let img = f
            .create_image(
                "MAP",
                &ImageDescription {
                    data_type: ImageType::Float,
                    dimensions: &[5, 6],
                },
            )
            .unwrap();
        let values: Vec<f32> = (0..30).map(|i| i as f32).collect();
        img.write_image(&mut f, &values).unwrap();
    }
    let m = map::load(&path, &opts()).unwrap();
    assert_eq!(m.hdu_index, 2);
    assert_eq!(m.hdu_name.as_deref(), Some("MAP"));
    assert_eq!((m.nx(), m.ny()), (6, 5));
    assert_eq!(m.data[(4, 5)], 29.0);
    assert!(
        !m.warnings.iter().any(|w| w.contains("images")),
        "{:?}",
        m.warnings
    );
}

#[test]
fn length_one_axes_are_squeezed_and_cube_planes_chosen() {
    let v = fixture_json("fits/values.json");
    let m = map::load(&fixture_path("fits/squeeze3d.fits"), &opts()).unwrap();
    assert_eq!(m.stored_axes, vec![7, 5, 1]);
    assert_same_pixels(
        &m.data,
        &nums(&v["files"]["squeeze3d.fits"]["values"]),
        "squeezed",
    );
    let cube = fixture_path("fits/cube.fits");
    let e = map::load(&cube, &opts()).unwrap_err();
    assert!(
        e.message.contains("is a cube: axis 3 (VRAD) has 4 planes")
            && e.message.contains("--plane"),
        "{e}"
    );
    assert_eq!(e.exit_code(), 2);
    let m = map::load(
        &cube,
        &LoadOptions {
            plane: Some(2),
            ..opts()
        },
    )
    .unwrap();
    assert_same_pixels(
        &m.data,
        &nums(&v["files"]["cube.fits"]["plane2"]),
        "plane 2",
    );
    let e = map::load(
        &cube,
        &LoadOptions {
            plane: Some(4),
            ..opts()
        },
    )
    .unwrap_err();
    assert!(e.message.contains("planes 0 to 3"), "{e}");
}

/// Compressed inputs read as astropy reads them: tile-compressed images (FITS Standard 4.0,
/// section 10; a lossless 16-bit one and a quantised float one with a missing pixel) after an
/// empty primary HDU, and a gzip-compressed file. The header is the image's, not its table's.
#[test]
fn compressed_files_read_as_astropy_reads_them() {
    let v = fixture_json("fits/values.json");
    for name in [
        "compressed_int.fits.fz",
        "compressed_float.fits.fz",
        "gzipped.fits.gz",
    ] {
        let reference = &v["files"][name];
        let m = map::load(&fixture_path(&format!("fits/{name}")), &opts()).unwrap();
        let shape = nums(&reference["shape"]);
        assert_eq!((m.ny(), m.nx()), (shape[0] as usize, shape[1] as usize));
        assert_same_pixels(&m.data, &nums(&reference["values"]), name);
        if name.ends_with(".fz") {
            assert_eq!(m.hdu_index, 1, "{name}: the first image with data");
            assert_eq!(m.header.get_i64("NAXIS1"), Some(m.nx() as i64), "{name}");
            assert_eq!(m.header.get_str("TFORM1"), None, "{name}: no table keyword");
            assert_eq!(m.unit_text, "Jy/beam", "{name}");
            assert!(m.wcs.is_some(), "{name}: its sky header");
        }
    }
    // The quantised image differs from what was written (so the dequantisation is checked),
    // and one pixel is missing.
    let r = &v["files"]["compressed_float.fits.fz"];
    let (read, written) = (nums(&r["values"]), nums(&r["written"]));
    assert!(read.iter().zip(&written).any(|(a, b)| a != b));
    assert_eq!(read.iter().filter(|x| x.is_nan()).count(), 1);
}

/// A tile-compressed file cut short is refused before any pixel is read, with the sentence
/// for truncated files.
#[test]
fn a_truncated_compressed_file_is_refused() {
    let bytes = std::fs::read(fixture_path("fits/compressed_float.fits.fz")).unwrap();
    let d = tempfile::tempdir().unwrap();
    let cut = d.path().join("cut.fits.fz");
    std::fs::write(&cut, &bytes[..bytes.len() - 2 * 2880]).unwrap();
    let e = map::load(&cut, &opts()).unwrap_err();
    assert!(e.message.contains("is truncated"), "{e}");
}

/// 64-bit values beyond the range of 32-bit floats (a -1e300 blank, 1e39) are missing pixels,
/// counted in a warning, rather than infinities among the values. The file is assembled by
/// hand after the FITS Standard 4.0 (80-byte cards in 2880-byte blocks, big-endian IEEE data).
#[test]
fn values_beyond_32_bit_floats_are_missing() {
    let (nx, ny) = (6usize, 4usize);
    let mut head = String::new();
    for c in [
        "SIMPLE  =                    T".to_string(),
        "BITPIX  =                  -64".to_string(),
        "NAXIS   =                    2".to_string(),
        format!("NAXIS1  = {nx:>20}"),
        format!("NAXIS2  = {ny:>20}"),
        "BUNIT   = 'MJy/sr'".to_string(),
        "END".to_string(),
    ] {
        head.push_str(&format!("{c:<80}"));
    }
    while !head.len().is_multiple_of(2880) {
        head.push(' ');
    }
    let mut bytes = head.into_bytes();
    for i in 0..nx * ny {
        let v = match i {
            3 => -1e300,
            10 => 1e39,
            _ => i as f64 * 0.5,
        };
        bytes.extend_from_slice(&v.to_be_bytes());
    }
    while !bytes.len().is_multiple_of(2880) {
        bytes.push(0);
    }
    let d = tempfile::tempdir().unwrap();
    let path = d.path().join("sentinel.fits");
    std::fs::write(&path, &bytes).unwrap();
    let m = map::load(&path, &opts()).unwrap();
    assert_eq!(m.missing_count(), 2);
    assert!(m.data[[0, 3]].is_nan() && m.data[[1, 4]].is_nan());
    assert_eq!(m.data[[0, 2]], 1.0);
    assert!(m.data.iter().all(|v| !v.is_infinite()));
    assert!(
        m.warnings
            .iter()
            .any(|w| w.starts_with("2 pixels hold values beyond")),
        "{:?}",
        m.warnings
    );
}

/// An image extension with INHERIT = T reads the primary header's keywords it lacks (unit,
/// WCS, beam), its own taking precedence (here CRVAL1): the sky position of a pixel equals
/// astropy 8.0.2's wcs_pix2world on the header the convention makes (astropy itself applies
/// no inheritance; tests/oracle/fits_astropy.py merges the cards).
#[test]
fn an_extension_with_inherit_reads_the_primary_header() {
    let v = fixture_json("fits/values.json");
    let r = &v["files"]["inherit.fits"];
    let m = map::load(&fixture_path("fits/inherit.fits"), &opts()).unwrap();
    assert_eq!(m.hdu_index, 1);
    assert_eq!(m.unit_text, "MJy/sr");
    assert!(m.beam.is_some(), "the primary's beam");
    let p = nums(&r["pixel"]);
    let (lon, lat) = m.wcs.as_ref().unwrap().pixel_to_sky(p[0], p[1]).unwrap();
    let (rl, rb) = (num(&r["lon"]), num(&r["lat"]));
    assert!(
        (lon - rl).abs() < 1e-9 && (lat - rb).abs() < 1e-9,
        "{lon} {lat} against {rl} {rb}"
    );
}

/// cairn holds pixels as 32-bit floats; a 64-bit map whose values that holding loses is
/// warned about: a large constant offset (1e9 added to values of order 0.1, whose
/// differences 32-bit floats near 1e9, spaced 64 apart, cannot keep; IEEE 754 binary32) and
/// values below the least normal 32-bit float (1.18e-38). The same values without the
/// offset, or of ordinary size, are read without a word.
#[test]
fn precision_lost_by_64_bit_maps_is_warned_about() {
    use fitsio::images::{ImageDescription, ImageType};
    let d = tempfile::tempdir().unwrap();
    let write = |name: &str, values: &[f64]| {
        let path = d.path().join(name);
        let mut f = fitsio::FitsFile::create(&path)
            .with_custom_primary(&ImageDescription {
                data_type: ImageType::Double,
                dimensions: &[20, 20],
            })
            .open()
            .unwrap();
        let hdu = f.primary_hdu().unwrap();
        hdu.write_image(&mut f, values).unwrap();
        path
    };
    let wiggle: Vec<f64> = (0..400).map(|i| ((i * 37) % 101) as f64 * 1e-3).collect();
    let warned = |path: &std::path::Path, says: &str| {
        let m = map::load(path, &opts()).unwrap();
        m.warnings.iter().any(|w| w.contains(says))
    };
    let offset: Vec<f64> = wiggle.iter().map(|v| v + 1e9).collect();
    let p = write("offset.fits", &offset);
    assert!(warned(&p, "read as equal once held as 32-bit floats"));
    assert!(warned(&p, "subtract the map's constant offset"));
    let p = write("plain.fits", &wiggle);
    assert!(!warned(&p, "32-bit"));
    let tiny: Vec<f64> = wiggle.iter().map(|v| (v + 1e-3) * 1e-300).collect();
    let p = write("tiny.fits", &tiny);
    assert!(warned(
        &p,
        "400 of the first 400 pixels hold values below the least normal 32-bit float"
    ));
}

/// An image extension without INHERIT = T whose primary header holds the unit, sky axes and
/// beam it lacks reads none of them (each HDU's header is its own, FITS Standard 4.0 section
/// 4.4.1) and is warned about once, naming the keywords and the fix; with INHERIT = T they are
/// read and the warning is gone.
#[test]
fn an_extension_without_inherit_names_the_primary_keywords_it_lacks() {
    // Assembled card by card (FITS Standard 4.0: 2880-byte blocks of 80-character cards,
    // big-endian data).
    let d = tempfile::tempdir().unwrap();
    let block = |cards: &[&str]| -> Vec<u8> {
        let mut h = String::new();
        for c in cards.iter().chain(&["END"]) {
            h.push_str(&format!("{c:<80}"));
        }
        while !h.len().is_multiple_of(2880) {
            h.push(' ');
        }
        h.into_bytes()
    };
    // `primary_image`: the primary holds a 2 x 2 image of its own.
    let write = |name: &str, inherit: bool, primary_image: bool| {
        let mut primary = vec![
            "SIMPLE  =                    T",
            "BITPIX  =                    8",
        ];
        if primary_image {
            primary.extend([
                "NAXIS   =                    2",
                "NAXIS1  =                    2",
                "NAXIS2  =                    2",
            ]);
        } else {
            primary.push("NAXIS   =                    0");
        }
        primary.extend([
            "EXTEND  =                    T",
            "BUNIT   = 'MJy/sr  '",
            "CTYPE1  = 'RA---TAN'",
            "CTYPE2  = 'DEC--TAN'",
            "BMAJ    =                0.005",
        ]);
        let mut bytes = block(&primary);
        if primary_image {
            bytes.extend(vec![0u8; 2880]);
        }
        let mut ext = vec![
            "XTENSION= 'IMAGE   '",
            "BITPIX  =                  -32",
            "NAXIS   =                    2",
            "NAXIS1  =                   20",
            "NAXIS2  =                   20",
            "PCOUNT  =                    0",
            "GCOUNT  =                    1",
            "EXTNAME = 'SCI     '",
        ];
        if inherit {
            ext.push("INHERIT =                    T");
        }
        bytes.extend(block(&ext));
        for i in 0..400 {
            bytes.extend_from_slice(&(((i * 37) % 101) as f32).to_be_bytes());
        }
        while !bytes.len().is_multiple_of(2880) {
            bytes.push(0);
        }
        let path = d.path().join(name);
        std::fs::write(&path, bytes).unwrap();
        path
    };
    let o = LoadOptions {
        require_unit: false,
        ..opts()
    };
    let m = map::load(&write("plain.fits", false, false), &o).unwrap();
    assert_eq!(m.hdu_index, 1);
    assert!(m.beam.is_none() && m.unit_text.is_empty());
    let said: Vec<&String> = m
        .warnings
        .iter()
        .filter(|w| w.contains("the primary header (HDU 0) has"))
        .collect();
    assert_eq!(said.len(), 1, "{:?}", m.warnings);
    assert!(
        said[0].contains("has CTYPE1, CTYPE2, BUNIT, BMAJ that this extension (HDU 1) lacks")
            && said[0].contains("add INHERIT = T"),
        "{}",
        said[0]
    );
    let m = map::load(&write("inherit.fits", true, false), &o).unwrap();
    assert_eq!(m.unit_text, "MJy/sr");
    assert!(m.beam.is_some());
    assert!(
        m.warnings
            .iter()
            .all(|w| !w.contains("the primary header (HDU 0)")),
        "{:?}",
        m.warnings
    );
    // A primary with an image of its own: its unit and beam are its own, so no note (the
    // extension, say a coverage map, is read as it is).
    let second = LoadOptions {
        hdu: HduChoice::Index(1),
        ..o.clone()
    };
    let m = map::load(&write("own.fits", false, true), &second).unwrap();
    assert_eq!(m.hdu_index, 1);
    assert!(
        m.warnings
            .iter()
            .all(|w| !w.contains("the primary header (HDU 0)")),
        "{:?}",
        m.warnings
    );
}

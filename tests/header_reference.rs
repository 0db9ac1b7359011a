//! Header reading against astropy 8.0.2 (tests/oracle/header_astropy.py, fixtures/header/):
//! string values continued on CONTINUE cards (astropy.io.fits), the length units of
//! wavelength keywords (astropy.units), and lower-case CTYPEs (astropy.wcs).

mod common;

use cairn::header::{Card, Header, Value, card_images};
use cairn::map::{self, HduChoice, LoadOptions};
use cairn::wcs::Wcs;
use common::{fixture_json, fixture_path, num, nums};

#[test]
fn continued_strings_read_as_astropy_reads_them() {
    // Source: astropy 8.0.2 astropy.io.fits on long_strings.fits: the primary HDU's BUNIT
    // ('MJy/&' continued by 'sr') and OBJECT (three parts, a comment on each), and an
    // extension whose EXTNAME astropy wrote on CONTINUE cards, which --hdu NAME selects.
    let f = fixture_json("header/long_strings.json");
    let hdus = f["hdus"].as_array().unwrap();
    let path = fixture_path("header/long_strings.fits");
    let m = map::load(&path, &LoadOptions::default()).unwrap();
    assert_eq!(m.hdu_index, 0);
    assert_eq!(m.unit_text, hdus[0]["bunit"].as_str().unwrap());
    assert_eq!(m.unit_text, "MJy/sr");
    assert!(
        m.unit
            .is_some_and(|u| u.kind_name() == "surface brightness")
    );
    assert_eq!(
        m.header.get_str("OBJECT"),
        Some(hdus[0]["object"].as_str().unwrap())
    );
    let object = m.header.cards().iter().find(|c| c.key == "OBJECT").unwrap();
    assert_eq!(object.comment, hdus[0]["object_comment"].as_str().unwrap());
    let pixels = nums(&hdus[0]["pixels"]);
    assert!(m.data.iter().zip(&pixels).all(|(a, b)| *a as f64 == *b));

    let long = hdus[1]["extname"].as_str().unwrap();
    assert!(long.len() > 68, "the fixture's name needs a CONTINUE card");
    // By the name as astropy reads it, and in lower case (names are matched without case).
    for name in [long.to_string(), long.to_ascii_lowercase()] {
        let opts = LoadOptions {
            hdu: HduChoice::parse(&name),
            ..LoadOptions::default()
        };
        let m = map::load(&path, &opts).unwrap();
        assert_eq!(m.hdu_index, 1, "{name}");
        assert_eq!(m.hdu_name.as_deref(), Some(long));
        let pixels = nums(&hdus[1]["pixels"]);
        assert!(m.data.iter().zip(&pixels).all(|(a, b)| *a as f64 == *b));
    }
    let opts = LoadOptions {
        hdu: HduChoice::Name("SHORT".into()),
        ..LoadOptions::default()
    };
    assert_eq!(map::load(&path, &opts).unwrap().hdu_index, 2);
}

#[test]
fn long_strings_are_written_as_astropy_writes_them() {
    // Source: astropy 8.0.2 astropy.io.fits.Card images of string values of 68, 69, 140
    // characters and with doubled quotes: cairn reads astropy's images back to the value,
    // and writes the same images byte for byte for values without blanks (astropy cuts a
    // value with blanks at a blank where it can, which the convention leaves free; cairn
    // cuts at 67 characters, and its images read back to the value all the same).
    let f = fixture_json("header/long_strings.json");
    for w in f["written"].as_array().unwrap() {
        let value = w["value"].as_str().unwrap();
        let want: Vec<String> = w["images"]
            .as_array()
            .unwrap()
            .iter()
            .map(|i| format!("{:<80}", i.as_str().unwrap()))
            .collect();
        let card = Card {
            key: "LONGKEY".into(),
            value: Some(Value::Str(value.into())),
            comment: String::new(),
        };
        let mine = card_images(&card);
        if !value.contains(' ') {
            assert_eq!(mine, want, "{value}");
        }
        for images in [&want, &mine] {
            assert_eq!(
                Header::parse(&images.concat()).get_str("LONGKEY"),
                Some(value)
            );
        }
    }
}

/// A header of one card.
fn one(card: &str) -> Header {
    Header::parse(&format!("{card:<80}"))
}

#[test]
fn wavelength_keywords_match_astropy_units() {
    // Source: astropy 8.0.2 astropy.units: metres per unit of each unit cairn reads in the
    // comment of WAVELEN/WAVELNTH, and the wavelength of each case's card in the unit it
    // names (RESTFRQ and the like in Hz, through astropy's spectral equivalency), null where
    // astropy cannot make it a length or it lies outside 1 um to 10 m. cairn must agree to
    // 1e-12 relative, and where there is no wavelength say why, naming the keyword.
    let f = fixture_json("header/wavelength_units.json");
    for (unit, factor) in f["metres_per_unit"].as_object().unwrap() {
        let factor = num(factor);
        // A value that puts the wavelength at 850 um, whatever the unit.
        let v = 8.5e-4 / factor;
        let mut w = Vec::new();
        let h = one(&format!("WAVELEN = {v:>20.6E} / [{unit}] wavelength"));
        let got = map::wavelength_from_header(&h, &mut w).unwrap_or(f64::NAN);
        assert!((got / 8.5e-4 - 1.0).abs() < 1e-12, "[{unit}]: {got} {w:?}");
        // In capitals, as older headers write units (no two of these units differ by case
        // alone but Angstrom and angstrom, the same unit).
        let h = one(&format!(
            "WAVELEN = {v:>20.6E} / [{}]",
            unit.to_ascii_uppercase()
        ));
        let caps = map::wavelength_from_header(&h, &mut w).unwrap_or(f64::NAN);
        assert!((caps / 8.5e-4 - 1.0).abs() < 1e-12, "[{unit}] in capitals");
    }
    // 'microns', common in headers though not an astropy unit, is astropy's 'micron'.
    let micron = num(&f["metres_per_unit"]["micron"]);
    let mut w = Vec::new();
    let h = one("WAVELEN =                850.0 / wavelength in microns");
    let got = map::wavelength_from_header(&h, &mut w).unwrap();
    assert!((got / (850.0 * micron) - 1.0).abs() < 1e-12 && w.is_empty());
    for c in f["cases"].as_array().unwrap() {
        let card = c["card"].as_str().unwrap();
        let key = card[..8].trim();
        let mut w = Vec::new();
        let got = map::wavelength_from_header(&one(card), &mut w);
        match (got, c["metres"].as_f64()) {
            (Some(m), Some(want)) => {
                assert!((m / want - 1.0).abs() < 1e-12, "{card}: {m} against {want}");
                assert!(w.is_empty(), "{card}: {w:?}");
            }
            (None, None) => assert!(
                w.len() == 1
                    && w[0].starts_with(&format!("{key} = "))
                    && w[0].contains("--wavelength"),
                "{card}: {w:?}"
            ),
            (got, want) => panic!("{card}: cairn {got:?}, astropy {want:?} ({w:?})"),
        }
    }
}

#[test]
fn wavelength_units_are_never_matched_inside_words() {
    // A stated property (FITS Standard 4.0, section 4.3.2, puts a unit in brackets at the
    // start of the comment): a unit is read from brackets, or from a whole word of the
    // comment, never from inside one ('spectrum' holds no 'um', 'summary' no 'mm'); a
    // comment naming two different units gives no wavelength, and says so.
    let mut w = Vec::new();
    let h = one("WAVELNTH=              0.00085 / central wavelength of the spectrum");
    // No unit found: the value is read in metres (below 0.01), with a warning saying so.
    assert_eq!(map::wavelength_from_header(&h, &mut w), Some(0.00085));
    assert!(
        w.len() == 1 && w[0].contains("no unit in its comment"),
        "{w:?}"
    );
    let mut w = Vec::new();
    let h = one("WAVELEN =                850.0 / summary value");
    assert!((map::wavelength_from_header(&h, &mut w).unwrap() - 850e-6).abs() < 1e-18);
    assert!(w.len() == 1 && w[0].contains("read as 850 um"), "{w:?}");
    let mut w = Vec::new();
    let h = one("WAVELEN =                850.0 / 850 um, or 0.85 mm");
    assert_eq!(map::wavelength_from_header(&h, &mut w), None);
    assert!(
        w.len() == 1 && w[0].contains("several units (um, mm)"),
        "{w:?}"
    );
}

#[test]
fn lower_case_ctypes_give_astropy_positions_and_upper_case_cards() {
    // Source: astropy 8.0.2 astropy.wcs: the upper-case header is read (pixel -> sky of a few
    // pixels, origin 0), the lower-case one refused (InconsistentAxisTypesError). cairn reads
    // the lower-case one as the upper-case one (1e-9 degree) and writes its CTYPEs in the
    // spelling astropy reads.
    let f = fixture_json("header/ctype_case.json");
    let (upper, lower) = (&f["upper"], &f["lower"]);
    assert!(upper["astropy_reads"].as_bool().unwrap());
    assert!(!lower["astropy_reads"].as_bool().unwrap());
    let w = Wcs::from_header(&cards_of(lower)).unwrap().unwrap();
    let (xs, ys, lons, lats) = (
        nums(&upper["x"]),
        nums(&upper["y"]),
        nums(&upper["lon"]),
        nums(&upper["lat"]),
    );
    for i in 0..xs.len() {
        let (lon, lat) = w.pixel_to_sky(xs[i], ys[i]).unwrap();
        assert!(
            (lon - lons[i]).abs() < 1e-9 && (lat - lats[i]).abs() < 1e-9,
            "pixel ({}, {})",
            xs[i],
            ys[i]
        );
    }
    let written = w.header_cards();
    for (i, want) in upper["ctype"].as_array().unwrap().iter().enumerate() {
        let c = written
            .iter()
            .find(|c| c.key == format!("CTYPE{}", i + 1))
            .unwrap();
        assert_eq!(c.value, Some(Value::Str(want.as_str().unwrap().into())));
    }
}

#[test]
fn ctype_pairs_are_celestial_where_astropy_finds_a_pair() {
    // Source: astropy 8.0.2 astropy.wcs (fixtures/header/ctype_pairs.json): bare coordinate
    // names beside their partner are a celestial pair (read as linear axes), beside an axis
    // that is not their partner (a position-velocity map) no pair, so the map loads in pixel
    // units; a header astropy refuses (a bare name beside a projected axis) is refused.
    let f = fixture_json("header/ctype_pairs.json");
    let cases = f["cases"].as_array().unwrap();
    assert!(cases.len() >= 9);
    for c in cases {
        let got = Wcs::from_header(&cards_of(c));
        let ctype = &c["ctype"];
        if c["astropy_reads"].as_bool().unwrap() {
            let celestial = c["has_celestial"].as_bool().unwrap();
            assert_eq!(
                got.as_ref().map(|w| w.is_some()).ok(),
                Some(celestial),
                "{ctype}"
            );
        } else {
            assert!(got.is_err(), "{ctype}");
        }
    }
}

/// The header of a fixture entry's `cards` (80-character card images, as astropy wrote them).
fn cards_of(entry: &serde_json::Value) -> Header {
    let text: String = entry["cards"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .collect();
    Header::parse(&text)
}

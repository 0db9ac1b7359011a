//! The options of the stored segmentation in `fixtures/segment/run/`, and the runs behind
//! `fixtures/segment/unit_spellings.json`, shared by the example that makes them and the test
//! that checks them.

use std::path::Path;

use cairn::hierarchy::Connectivity;
use cairn::segment::{Area, Level, SegmentOptions};

/// The options of the stored run, writing to `out`.
pub fn fixture_options(out: &Path) -> SegmentOptions {
    SegmentOptions {
        floor: Some(Level::Value(3.2e21)),
        prominence: Some(Level::Value(6.0e20)),
        min_area: Some(Area::Pixels(4.0)),
        connectivity: Connectivity::Eight,
        grow_leaves: true,
        leaves_only: false,
        noise: cairn::inspect::NoiseChoice::Value(1.0e20),
        output: out.to_path_buf(),
        force: true,
        command_line: vec!["fixture".into()],
        // The map's invented distance (its DISTANCE card), an invented gas temperature and
        // non-thermal velocity dispersion, so the catalogue has masses, linear sizes and every
        // stability column for the oracle to check.
        physics: cairn::score::Context {
            distance_m: Some(310.0 * cairn::physics::constants::PC),
            temperature_k: Some(cairn::score::Field::Uniform(12.0)),
            sigma_nt: Some(cairn::score::Field::Uniform(200.0)),
            ..Default::default()
        },
        other_inputs: Vec::new(),
        threshold_texts: Default::default(),
        figure: None,
        label_choice: Default::default(),
    }
}

#[path = "catalogue_files.rs"]
pub mod catalogue_files;

/// Spellings of map units (BUNIT) that cairn reads, for the check of the units its catalogues
/// write (`fixtures/segment/unit_spellings.json`, which tests/oracle/segment_skimage.py reads
/// with astropy): the canonical ones, others in use for the same units (products with their
/// inverse factor first, and negative powers in capitals, among them), surface brightness per
/// square arcsecond, arcminute and degree, FITS's dimensionless `1`, and a unit cairn does not
/// convert (`K km/s`).
#[allow(dead_code)]
pub const UNIT_SPELLINGS: [&str; 52] = [
    "cm-2",
    "CM-2",
    "1/cm2",
    "cm^-2",
    "N(H2) cm-2",
    "m-2",
    "mag",
    "Mag",
    "magnitudes",
    "mag(AK)",
    "mag(AV)",
    "A_V",
    "MJy/sr",
    "MJY/SR",
    "MJy/steradian",
    "MJy.sr-1",
    "MJy sr-1",
    "sr-1 MJy",
    "MJY SR-1",
    "Jy/sr",
    "mJy/arcsec**2",
    "mJy arcsec-2",
    "arcsec-2 mJy",
    "mJy ARCSEC-2",
    "Jy/arcmin2",
    "Jy/arcmin**2",
    "mJy arcmin-2",
    "arcmin-2 mJy",
    "MJy/deg2",
    "Jy deg-2",
    "deg-2 Jy",
    "MJY/DEG2",
    "Jy/beam",
    "JY/BEAM",
    "Jy/Beam",
    "jy/beam",
    "Jansky/beam",
    "JANSKY/BEAM",
    "beam-1 Jy",
    "JY BEAM-1",
    "JY.BEAM-1",
    "BEAM-1 JY",
    "mJy/beam",
    "beam-1 mJy",
    "MJY/BEAM",
    "uJy/beam",
    "Jy/pixel",
    "Jy/pix",
    "pixel-1 Jy",
    "JY PIXEL-1",
    "1",
    "K km/s",
];

/// The stored run's segmentation of `fixtures/segment/map.fits` written again with BUNIT
/// `bunit` (and, for dust emission, a wavelength of 850 um, so that every physics column is
/// there), in `dir`: the unit the run read (its catalogue's `unit` parameter) and every unit
/// its catalogues write, of columns (CSV `[unit]`, FITS `TUNITn`, VOTable FIELD `unit`) and of
/// parameters (CSV, FITS comment `[unit]`, VOTable PARAM `unit`), in both catalogues.
#[allow(dead_code)]
pub fn catalogue_units(dir: &Path, bunit: &str) -> (String, std::collections::BTreeSet<String>) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/segment");
    let base = cairn::map::load(&root.join("map.fits"), &Default::default()).unwrap();
    let mut header = base.header.clone();
    header.set("BUNIT", cairn::header::Value::Str(bunit.into()), "");
    let path = dir.join("map.fits");
    let _ = std::fs::remove_file(&path);
    cairn::fits_write::write_image_f32(&path, base.data.view(), &header, true).unwrap();
    let opts = cairn::map::LoadOptions {
        wavelength: Some(
            cairn::units::parse_quantity("850um", &[cairn::units::Dimension::Length], "").unwrap(),
        ),
        ..Default::default()
    };
    let map = cairn::map::load(&path, &opts).unwrap();
    let out = dir.join("run");
    cairn::segment::run(&map, &fixture_options(&out), &|_, _| {}).unwrap();
    let mut units = std::collections::BTreeSet::new();
    let mut read = String::new();
    for stem in ["structures", "structures-grown"] {
        let csv = std::fs::read_to_string(out.join(format!("{stem}.csv"))).unwrap();
        units.extend(csv.lines().filter_map(|l| {
            let (head, _) = l.strip_prefix("# column ")?.split_once(": ")?;
            Some(head.split_once(" [")?.1.strip_suffix(']')?.to_string())
        }));
        for p in catalogue_files::csv_params(&csv) {
            if p.name == "unit" {
                read = p.value.clone();
            }
            units.insert(p.unit);
        }
        let fits = std::fs::read(out.join(format!("{stem}.fits"))).unwrap();
        for c in catalogue_files::extension_cards(&fits) {
            if c.starts_with("TUNIT") {
                let v = c[10..].trim().trim_start_matches('\'');
                units.insert(v.split('\'').next().unwrap().trim_end().to_string());
            }
        }
        for c in catalogue_files::fits_params(&fits) {
            if let Some(u) = c.comment.strip_prefix('[').and_then(|r| r.split_once(']')) {
                units.insert(u.0.to_string());
            }
        }
        let vot = std::fs::read_to_string(out.join(format!("{stem}.vot"))).unwrap();
        let doc = roxmltree::Document::parse(&vot).unwrap();
        units.extend(
            doc.descendants()
                .filter(|n| n.has_tag_name("FIELD") || n.has_tag_name("PARAM"))
                .filter_map(|n| n.attribute("unit").map(str::to_string)),
        );
    }
    units.remove("");
    (read, units)
}

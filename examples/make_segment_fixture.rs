//! Regenerates `fixtures/segment/`: a small synthetic map with missing pixels
//! (`map.fits`) and cairn's segmentation of it (`run/`), which
//! `tests/oracle/segment_skimage.py` measures with scikit-image and astropy, and the units
//! cairn's catalogues write for each spelling of a map's unit (`unit_spellings.json`), which
//! it parses with astropy.
//!
//! Run from the repository root, then re-run the oracle:
//!
//! ```text
//! cargo run --example make_segment_fixture
//! python tests/oracle/segment_skimage.py
//! ```
//!
//! `tests/segment_reference.rs` re-runs the same segmentation and checks that the stored run
//! is byte-identical to what cairn makes now, so the oracle describes the current code.

use std::path::Path;

use cairn::synth::{Background, CorePopulation, CoreSpec, Output, Profile, SynthSpec};

#[path = "../tests/common/segment_fixture.rs"]
mod segment_fixture;
use segment_fixture::fixture_options;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let spec = SynthSpec {
        nx: 160,
        ny: 128,
        pixel_arcsec: 6.0,
        centre_lon_deg: 152.8125,
        centre_lat_deg: 11.40625,
        beam_fwhm_arcsec: 18.0,
        distance_pc: 310.0,
        background: Some(Background {
            mean_column_cm2: 2.5e21,
            sigma_ln: 0.3,
            spectral_index: 3.2,
        }),
        // A faint core smaller than the beam, on a quiet part of the background, so that the
        // catalogue holds a leaf whose footprint is under 1.39 beam areas (`unresolved`).
        cores: vec![CoreSpec {
            x: 108.0,
            y: 60.0,
            mass_msun: 0.025,
            radius_pc: 0.003,
            profile: Profile::Gaussian,
        }],
        population: Some(CorePopulation {
            count: 14,
            mass_min_msun: 1.0,
            mass_max_msun: 12.0,
            mass_index: 2.35,
            radius_min_pc: 0.02,
            radius_max_pc: 0.06,
            profile: Profile::Gaussian,
            margin_px: 8.0,
        }),
        output: Output::ColumnDensity,
        noise_rms: 1.0e20,
        seed: 4242,
        ..SynthSpec::default()
    };
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/segment");
    std::fs::create_dir_all(&root)?;
    let mut map = cairn::synth::generate(&spec)?;
    // Missing pixels: a block and a column stub, so the flags and the mask are exercised.
    for y in 40..46 {
        for x in 100..107 {
            map.data[(y, x)] = f32::NAN;
        }
    }
    for y in 0..20 {
        map.data[(y, 30)] = f32::NAN;
    }
    let path = root.join("map.fits");
    cairn::fits_write::write_image_f32(&path, map.data.view(), &map.header, true)?;
    let m = cairn::map::load(&path, &cairn::map::LoadOptions::default())?;
    let s = cairn::segment::run(&m, &fixture_options(&root.join("run")), &|_, _| {})?;
    // The run record holds timings and paths; it is not part of the fixture.
    std::fs::remove_file(root.join("run/run.json"))?;
    // The units the catalogues write for each spelling of the map's unit, for the oracle.
    let scratch = tempfile::tempdir()?;
    let mut spellings = serde_json::Map::new();
    for bunit in segment_fixture::UNIT_SPELLINGS {
        let (read, units) = segment_fixture::catalogue_units(scratch.path(), bunit);
        spellings.insert(
            bunit.to_string(),
            serde_json::json!({
                "unit": read,
                "sum_unit": cairn::units::times_pixel(&read),
                "units": units,
            }),
        );
    }
    std::fs::write(
        root.join("unit_spellings.json"),
        serde_json::to_string_pretty(&spellings)? + "\n",
    )?;
    println!(
        "{} leaves, {} branches, {} roots with children written under {}",
        s.leaves,
        s.branches,
        s.roots,
        root.display()
    );
    Ok(())
}

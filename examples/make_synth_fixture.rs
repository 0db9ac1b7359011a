//! Regenerates `fixtures/synth/background.fits` and `fixtures/synth/background_spec.json`, the
//! background-only synthetic map whose power spectrum `tests/oracle/synth_powerspec.py`
//! measures.
//!
//! Run from the repository root:
//!
//! ```text
//! cargo run --example make_synth_fixture
//! /work/venv/bin/python tests/oracle/synth_powerspec.py
//! ```
//!
//! `tests/synth_truth.rs` checks that the stored map is still byte-identical to what the
//! generator makes from the stored spec, so the oracle's measurement describes the current
//! generator; rerun both commands whenever the generator changes on purpose.

use cairn::synth::{Background, Output, SynthSpec, generate};
use std::path::Path;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let spec = SynthSpec {
        nx: 256,
        ny: 256,
        pixel_arcsec: 10.0,
        centre_lon_deg: 147.8125,
        centre_lat_deg: 23.4375,
        beam_fwhm_arcsec: 0.0,
        background: Some(Background {
            mean_column_cm2: 2.0e21,
            sigma_ln: 0.5,
            spectral_index: 3.0,
        }),
        output: Output::ColumnDensity,
        noise_rms: 0.0,
        seed: 20_260_101,
        ..SynthSpec::default()
    };
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/synth");
    std::fs::create_dir_all(&dir)?;
    let map = generate(&spec)?;
    cairn::fits_write::write_image_f32(
        &dir.join("background.fits"),
        map.data.view(),
        &map.header,
        true,
    )?;
    std::fs::write(
        dir.join("background_spec.json"),
        serde_json::to_string_pretty(&spec)? + "\n",
    )?;
    println!("wrote {}", dir.display());
    Ok(())
}

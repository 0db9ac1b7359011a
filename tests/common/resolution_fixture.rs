//! The point-source map and its smoothing to a common resolution, shared by the example that
//! stores them and the test that checks them.

use std::path::Path;

/// Distance (pc) and target resolution (pc) of the fixture.
pub const DISTANCE_PC: f64 = 300.0;
/// Target linear resolution (pc).
pub const RESOLUTION_PC: f64 = 0.08;

/// Writes the point-source map to `point` and returns it smoothed to the target resolution.
pub fn smoothed(point: &Path) -> Result<cairn::map::Map, Box<dyn std::error::Error>> {
    use cairn::synth::{CoreSpec, Output, Profile, SynthSpec};
    let spec = SynthSpec {
        nx: 160,
        ny: 160,
        pixel_arcsec: 6.0,
        centre_lon_deg: 118.40625,
        centre_lat_deg: -41.28125,
        beam_fwhm_arcsec: 18.0,
        distance_pc: DISTANCE_PC,
        background: None,
        cores: vec![CoreSpec {
            x: 80.0,
            y: 80.0,
            mass_msun: 1.0,
            radius_pc: 1e-4,
            profile: Profile::Gaussian,
        }],
        output: Output::ColumnDensity,
        noise_rms: 0.0,
        seed: 3,
        ..SynthSpec::default()
    };
    let m = cairn::synth::generate(&spec)?;
    cairn::fits_write::write_image_f32(point, m.data.view(), &m.header, true)?;
    let map = cairn::map::load(point, &Default::default())?;
    let pc = cairn::physics::constants::PC;
    Ok(cairn::resolution::to_common_resolution(
        &map,
        RESOLUTION_PC * pc,
        DISTANCE_PC * pc,
    )?)
}

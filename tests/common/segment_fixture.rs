//! The options of the stored segmentation in `fixtures/segment/run/`, shared by the example
//! that makes it and the test that checks it.

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
    }
}

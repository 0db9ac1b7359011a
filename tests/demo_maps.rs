//! The demo maps are what `cairn synth` makes from their stored specifications, byte for byte,
//! and stay within the 2 MB the repository allows for each.

use std::path::PathBuf;

#[test]
fn demo_maps_are_reproducible_from_their_specifications() {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps");
    let tmp = tempfile::tempdir().unwrap();
    for name in ["velloran-column", "velloran-850um"] {
        let spec: cairn::synth::SynthSpec = serde_json::from_str(
            &std::fs::read_to_string(dir.join(format!("{name}-spec.json"))).unwrap(),
        )
        .unwrap();
        let map = cairn::synth::generate(&spec).unwrap();
        let out = tmp.path().join(format!("{name}.fits"));
        cairn::fits_write::write_image_f32(&out, map.data.view(), &map.header, true).unwrap();
        let stored = std::fs::read(dir.join(format!("{name}.fits"))).unwrap();
        assert!(
            stored.len() <= 2_000_000,
            "{name}.fits is {} bytes",
            stored.len()
        );
        assert!(
            std::fs::read(&out).unwrap() == stored,
            "{name}.fits differs from what its spec makes now"
        );
        // The truth names its map by SHA-256, as `cairn synth` writes it, so that `compare
        // --truth` scores runs of the demo maps.
        let truth = tmp.path().join(format!("{name}-truth.csv"));
        let sha = cairn::segment::sha256_file(&out).unwrap();
        cairn::synth::write_truth_csv_with_notes(
            &truth,
            &map.truth,
            &[cairn::completeness::map_note(&format!("{name}.fits"), &sha)],
        )
        .unwrap();
        assert_eq!(
            std::fs::read(&truth).unwrap(),
            std::fs::read(dir.join(format!("{name}-truth.csv"))).unwrap()
        );
    }
}

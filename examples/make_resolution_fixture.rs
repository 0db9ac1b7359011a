//! Regenerates `fixtures/resolution/`: a point source seen with an 18" beam, brought to a
//! 0.08 pc resolution at 300 pc by `cairn::resolution`, which
//! `tests/oracle/resolution_astropy.py` fits with astropy's Gaussian2D.
//!
//! ```text
//! cargo run --example make_resolution_fixture
//! python tests/oracle/resolution_astropy.py
//! ```

#[path = "../tests/common/resolution_fixture.rs"]
mod resolution_fixture;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/resolution");
    std::fs::create_dir_all(&dir)?;
    let smoothed = resolution_fixture::smoothed(&dir.join("point.fits"))?;
    cairn::fits_write::write_image_f32(
        &dir.join("smoothed.fits"),
        smoothed.data.view(),
        &smoothed.header,
        true,
    )?;
    println!("wrote {}", dir.display());
    Ok(())
}

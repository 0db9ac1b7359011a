//! `cairn segment` and `cairn draw` on maps of extreme shapes (the figure's size stays
//! bounded), and `cairn draw` on run folders whose files do not belong together (refused with
//! one sentence naming the file).

#[path = "common/cli.rs"]
mod cli;

use cairn::header::{Header, Value};
use cli::{Outcome, cairn_limited};
use std::path::{Path, PathBuf};

/// Runs cairn in `dir` with its address space limited to 2 GB, so that a runaway allocation
/// fails the test instead of exhausting the machine.
fn cairn(args: &[&str], dir: &Path) -> Outcome {
    cairn_limited(args, dir, 2_000_000)
}

/// An invented `nx` x `ny` map of 6" pixels in Jy/beam with three Gaussian bumps along its
/// long side on a faint ripple.
fn write_map(dir: &Path, name: &str, nx: usize, ny: usize) -> PathBuf {
    let mut h = Header::new();
    let mut set = |k: &str, v: Value| h.set(k, v, "");
    set("CTYPE1", Value::Str("RA---TAN".into()));
    set("CTYPE2", Value::Str("DEC--TAN".into()));
    set("CRPIX1", Value::Float(nx as f64 / 2.0 + 0.5));
    set("CRPIX2", Value::Float(ny as f64 / 2.0 + 0.5));
    set("CRVAL1", Value::Float(120.0));
    set("CRVAL2", Value::Float(-30.0));
    set("CDELT1", Value::Float(-6.0 / 3600.0));
    set("CDELT2", Value::Float(6.0 / 3600.0));
    set("BUNIT", Value::Str("Jy/beam".into()));
    let long = nx.max(ny) as f64;
    let data = ndarray::Array2::from_shape_fn((ny, nx), |(y, x)| {
        let t = if nx >= ny { x } else { y } as f64;
        let mut v = 0.01 * (1.7 * t).sin();
        for c in [0.2, 0.5, 0.8] {
            v += (-0.5 * ((t - c * long) / (0.02 * long)).powi(2)).exp();
        }
        v as f32
    });
    let p = dir.join(name);
    cairn::fits_write::write_image_f32(&p, data.view(), &h, false).unwrap();
    p
}

/// Width and height of a PNG file.
fn png_size(p: &Path) -> (u32, u32) {
    let img = image::load_from_memory(&std::fs::read(p).unwrap()).unwrap();
    (img.width(), img.height())
}

#[test]
fn one_pixel_wide_or_tall_maps_give_figures_of_bounded_size() {
    // The figure module's bound (cairn::render::PANEL_MAX_HEIGHT): the map panel is at most
    // twice the figure's width tall, and the margins add less than half the width.
    let bound = |w: u32| (cairn::render::PANEL_MAX_HEIGHT + 0.5) * w as f64;
    let d = tempfile::tempdir().unwrap();
    for (nx, ny) in [(1, 2000), (2000, 1)] {
        let name = format!("m{nx}x{ny}.fits");
        write_map(d.path(), &name, nx, ny);
        let run = format!("run{nx}x{ny}");
        let o = cairn(
            &["segment", &name, "-o", &run, "--min-area", "2px", "-q"],
            d.path(),
        );
        assert_eq!(o.code, 0, "{nx} x {ny}: {}", o.stderr);
        let (w, h) = png_size(&d.path().join(&run).join("overlay.png"));
        assert_eq!(w, 1600, "{nx} x {ny}: the requested width");
        assert!((h as f64) < bound(w), "{nx} x {ny}: overlay {w} x {h}");
        let svg = std::fs::read_to_string(d.path().join(&run).join("overlay.svg")).unwrap();
        roxmltree::Document::parse(&svg).expect("the SVG is well-formed XML");
        // Redrawn from the folder at another width, bounded the same way.
        let again = format!("again{nx}x{ny}");
        let o = cairn(
            &["draw", &run, "-o", &again, "--width", "900", "-q"],
            d.path(),
        );
        assert_eq!(o.code, 0, "{nx} x {ny}: {}", o.stderr);
        let (w, h) = png_size(&d.path().join(&again).join("overlay.png"));
        assert_eq!(w, 900);
        assert!(
            (h as f64) < bound(w),
            "{nx} x {ny}: redrawn overlay {w} x {h}"
        );
    }
}

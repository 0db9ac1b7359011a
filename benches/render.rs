//! Drawing the figure of a large map: time against colour-mapping alone.
//!
//! `cargo bench --bench render [-- SIZE]` invents a SIZE x SIZE map (default 4096) with a few
//! hundred Gaussian cores and their footprints, then measures, in the same run (median of 3):
//! * the reference: colour-mapping the whole map at full resolution (`render::colorize`);
//! * `render::render_png` of the overlay at the default style (1600 pixels wide);
//! * `render::render_svg` of the same overlay;
//! * `render::render_pdf` of the same overlay;
//! * `render::render_map_figure`: the three drawn from one layout at once, as `segment` and
//!   `draw` do.
//!
//! An argument ending in `.png` names a file to write the figure to, for looking at.

use cairn::render::{self, LeafStyle, Overlay, SkyAxes, StateLegend, Style};
use ndarray::Array2;
use std::time::Instant;

struct Flat;

impl SkyAxes for Flat {
    fn pixel_to_sky(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let s = 1.0 / 3600.0;
        Some((
            (45.0 - (x - 2048.0) * s / 30f64.to_radians().cos()).rem_euclid(360.0),
            30.0 + (y - 2048.0) * s,
        ))
    }
    fn sky_to_pixel(&self, lon: f64, lat: f64) -> Option<(f64, f64)> {
        let s = 1.0 / 3600.0;
        Some((
            2048.0 - (lon - 45.0) * 30f64.to_radians().cos() / s,
            2048.0 + (lat - 30.0) / s,
        ))
    }
    fn equatorial(&self) -> bool {
        true
    }
    fn pixel_scale_deg(&self) -> f64 {
        1.0 / 3600.0
    }
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn time<T>(f: impl Fn() -> T) -> (f64, T) {
    let mut times = Vec::new();
    let mut out = None;
    for _ in 0..3 {
        let t = Instant::now();
        out = Some(f());
        times.push(t.elapsed().as_secs_f64());
    }
    (median(times), out.expect("ran"))
}

fn main() {
    let n: usize = std::env::args()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(4096);
    // Invented cores on a regular jittered grid.
    let mut map = Array2::<f32>::from_shape_fn((n, n), |(y, x)| {
        (1.0 + 0.2 * ((x as f32) / 97.0).sin() * ((y as f32) / 131.0).cos()) * 1e21
    });
    let mut labels = Array2::<i32>::from_elem((n, n), -1);
    let mut leaves = Vec::new();
    let cells = 20;
    let pitch = n / cells;
    for j in 0..cells {
        for i in 0..cells {
            let id = (j * cells + i) as i32;
            let cx = (i * pitch + pitch / 2 + (id as usize * 37) % (pitch / 4)) as f64;
            let cy = (j * pitch + pitch / 2 + (id as usize * 53) % (pitch / 4)) as f64;
            let r = (pitch as f64) * (0.08 + 0.04 * ((id % 5) as f64));
            let amp = 5e21 * (1.0 + (id % 7) as f64);
            let ext = (4.0 * r) as i64;
            for y in (cy as i64 - ext).max(0)..(cy as i64 + ext).min(n as i64) {
                for x in (cx as i64 - ext).max(0)..(cx as i64 + ext).min(n as i64) {
                    let d2 = (x as f64 - cx).powi(2) + (y as f64 - cy).powi(2);
                    let g = amp * (-d2 / (2.0 * r * r)).exp();
                    map[[y as usize, x as usize]] += g as f32;
                    if g > 0.3 * amp {
                        labels[[y as usize, x as usize]] = id;
                    }
                }
            }
            leaves.push(LeafStyle {
                id,
                label: id.to_string(),
                state: (id % 3) as usize,
                peak: (cx, cy),
            });
        }
    }
    let states = ["bound", "unbound", "unknown"]
        .iter()
        .map(|s| StateLegend {
            name: s.to_string(),
            description: String::new(),
        })
        .collect();
    let sky = Flat;
    let o = Overlay {
        map: map.view(),
        unit_label: "N(H_2) [cm^-2]".into(),
        labels: labels.view(),
        branch_labels: None,
        branch_of: None,
        leaves,
        states,
        sky: Some(&sky),
        beam: Some((18.0, 12.0, 30.0)),
        scale_bar: Some((400.0, "0.1 pc".into())),
        title: None,
        name: None,
    };
    let style = Style::default();
    let (t_ref, rgb) = time(|| render::colorize(map.view(), &style).expect("colour map"));
    let (t_png, png) = time(|| render::render_png(&o, &style).expect("png"));
    let (t_svg, svg) = time(|| render::render_svg(&o, &style).expect("svg"));
    let (t_pdf, pdf) = time(|| render::render_pdf(&o, &style).expect("pdf"));
    let (t_all, _) = time(|| render::render_map_figure(&o, &style).expect("all three"));
    if let Some(path) = std::env::args().skip(1).find(|a| a.ends_with(".png")) {
        std::fs::write(&path, &png).expect("write the figure");
    }
    println!(
        "map {n} x {n}, {} leaves, figure {} px wide",
        o.leaves.len(),
        style.width_px
    );
    println!(
        "reference: colour-map the full map      {:8.3} s ({} MB RGB)",
        t_ref,
        rgb.len() / 1_000_000
    );
    println!(
        "render_png (overlay, default style)     {:8.3} s ({:.2}x reference, {} kB)",
        t_png,
        t_png / t_ref,
        png.len() / 1000
    );
    println!(
        "render_svg (overlay, default style)     {:8.3} s ({:.2}x reference, {} kB)",
        t_svg,
        t_svg / t_ref,
        svg.len() / 1000
    );
    println!(
        "render_pdf (overlay, default style)     {:8.3} s ({:.2}x reference, {} kB)",
        t_pdf,
        t_pdf / t_ref,
        pdf.len() / 1000
    );
    println!(
        "render_map_figure (all three at once)   {:8.3} s ({:.2}x reference)",
        t_all,
        t_all / t_ref
    );
}

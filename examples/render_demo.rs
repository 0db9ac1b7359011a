//! Draws the figures of an invented cloud so they can be looked at.
//!
//! `cargo run --release --example render_demo -- OUT_DIR` writes `map.png`, `map.svg`,
//! `map_galactic_zoom.png`, `map_pixels_grey.png`, `map_strip.png`, `tree.png`, `tree.svg` and
//! `tree_log.png`. The map is made
//! up: Gaussian cores on a sloping background with a missing corner, footprints cut at a
//! fraction of each core's peak (one with a hole, two touching, one on the map edge), seen
//! through a gnomonic projection turned by 20 degrees.

use cairn::render::{
    ColorMap, LeafStyle, Limits, Overlay, SkyAxes, StateLegend, Stretch, Style, TreeNode,
    render_png, render_svg, tree_png, tree_svg,
};
use ndarray::Array2;

/// A gnomonic projection with square pixels, turned by `rot_deg`.
struct Tan {
    crval: (f64, f64),
    crpix: (f64, f64),
    scale: f64,
    rot_deg: f64,
    equatorial: bool,
}

impl SkyAxes for Tan {
    fn pixel_to_sky(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let (dx, dy) = (x - self.crpix.0, y - self.crpix.1);
        let (s, c) = self.rot_deg.to_radians().sin_cos();
        let xi = (-(c * dx - s * dy) * self.scale).to_radians();
        let eta = ((s * dx + c * dy) * self.scale).to_radians();
        let (a0, d0) = (self.crval.0.to_radians(), self.crval.1.to_radians());
        let den = d0.cos() - eta * d0.sin();
        let a = a0 + xi.atan2(den);
        let d = (d0.sin() + eta * d0.cos()).atan2(xi.hypot(den));
        Some((a.to_degrees().rem_euclid(360.0), d.to_degrees()))
    }
    fn sky_to_pixel(&self, lon: f64, lat: f64) -> Option<(f64, f64)> {
        let (a0, d0) = (self.crval.0.to_radians(), self.crval.1.to_radians());
        let (a, d) = (lon.to_radians(), lat.to_radians());
        let cosc = d0.sin() * d.sin() + d0.cos() * d.cos() * (a - a0).cos();
        if cosc <= 0.0 {
            return None;
        }
        let xi = (d.cos() * (a - a0).sin() / cosc).to_degrees() / self.scale;
        let eta = ((d0.cos() * d.sin() - d0.sin() * d.cos() * (a - a0).cos()) / cosc).to_degrees()
            / self.scale;
        // Undo the turn: (-u, v) = R (dx, dy) with u = c dx - s dy, v = s dx + c dy.
        let (s, c) = self.rot_deg.to_radians().sin_cos();
        let (u, v) = (-xi, eta);
        let dx = c * u + s * v;
        let dy = -s * u + c * v;
        Some((dx + self.crpix.0, dy + self.crpix.1))
    }
    fn equatorial(&self) -> bool {
        self.equatorial
    }
    fn pixel_scale_deg(&self) -> f64 {
        self.scale
    }
}

fn main() {
    let out = std::env::args().nth(1).unwrap_or_else(|| "figures".into());
    std::fs::create_dir_all(&out).expect("output folder");
    let (w, h) = (320usize, 240usize);
    let cores = [
        (80.0, 70.0, 9.0, 3.0e22),
        (150.0, 120.0, 14.0, 5.0e22),
        (172.0, 128.0, 7.0, 2.5e22),
        (240.0, 60.0, 10.0, 1.8e22),
        (311.0, 180.0, 9.0, 2.2e22),
        (60.0, 190.0, 12.0, 1.2e22),
    ];
    let mut map = Array2::<f32>::zeros((h, w));
    for ((y, x), v) in map.indexed_iter_mut() {
        let (xf, yf) = (x as f64, y as f64);
        let mut s = 2.0e21 + 8.0e18 * xf + 5.0e18 * yf;
        for &(cx, cy, r, a) in &cores {
            s += a * (-((xf - cx).powi(2) + (yf - cy).powi(2)) / (2.0 * r * r)).exp();
        }
        // A gentle ripple so the background is not flat.
        s += 1.0e21 * ((xf / 17.0).sin() * (yf / 23.0).cos());
        *v = s as f32;
        if x + y < 40 {
            *v = f32::NAN;
        }
    }
    let mut labels = Array2::<i32>::from_elem((h, w), -1);
    let mut branches = Array2::<i32>::from_elem((h, w), -1);
    for ((y, x), l) in labels.indexed_iter_mut() {
        let (xf, yf) = (x as f64, y as f64);
        let mut best = (-1i32, 0.0f64);
        for (i, &(cx, cy, r, a)) in cores.iter().enumerate() {
            let g = a * (-((xf - cx).powi(2) + (yf - cy).powi(2)) / (2.0 * r * r)).exp();
            if g > 0.3 * a && g > best.1 {
                best = (i as i32 + 1, g);
            }
        }
        *l = best.0;
        // A hole in core 2.
        if (xf - 146.0).powi(2) + (yf - 116.0).powi(2) < 9.0 {
            *l = -1;
        }
        if (xf - 160.0).powi(2) / 900.0 + (yf - 123.0).powi(2) / 500.0 < 1.0 {
            branches[[y, x]] = 100;
        }
    }
    let states = vec![
        StateLegend {
            name: "bound".into(),
            description: "virial parameter below 2".into(),
        },
        StateLegend {
            name: "unbound".into(),
            description: "virial parameter above 2".into(),
        },
        StateLegend {
            name: "unknown".into(),
            description: "no line width".into(),
        },
    ];
    let leaves: Vec<LeafStyle> = cores
        .iter()
        .enumerate()
        .map(|(i, &(cx, cy, _, _))| LeafStyle {
            id: i as i32 + 1,
            label: format!("{}", i + 1),
            state: [0, 0, 1, 2, 1, 0][i],
            peak: (cx, cy),
        })
        .collect();
    let eq = Tan {
        crval: (133.69, -6.73),
        crpix: (160.0, 120.0),
        scale: 4.0 / 3600.0,
        rot_deg: 20.0,
        equatorial: true,
    };
    let o = Overlay {
        map: map.view(),
        unit_label: "N(H_2) [cm^-2]".into(),
        labels: labels.view(),
        branch_labels: Some(branches.view()),
        branch_of: None,
        leaves: leaves.clone(),
        states: states.clone(),
        sky: Some(&eq),
        beam: Some((9.0, 6.0, 30.0)),
        scale_bar: Some((25.0, "0.05 pc".into())),
        title: Some("Invented cloud".into()),
        name: None,
    };
    let style = Style {
        show_branches: true,
        ..Style::default()
    };
    std::fs::write(format!("{out}/map.png"), render_png(&o, &style).unwrap()).unwrap();
    std::fs::write(format!("{out}/map.svg"), render_svg(&o, &style).unwrap()).unwrap();

    let gal = Tan {
        crval: (56.25, -0.1),
        crpix: (160.0, 120.0),
        scale: 6.0 / 3600.0,
        rot_deg: 0.0,
        equatorial: false,
    };
    let o2 = Overlay {
        sky: Some(&gal),
        title: None,
        ..o
    };
    let zoom = Style {
        region: Some((110, 80, 110, 80)),
        stretch: Stretch::Asinh,
        colormap: ColorMap::Inferno,
        width_px: 1200,
        ..Style::default()
    };
    std::fs::write(
        format!("{out}/map_galactic_zoom.png"),
        render_png(&o2, &zoom).unwrap(),
    )
    .unwrap();
    let o3 = Overlay {
        sky: None,
        beam: Some((9.0, 6.0, 30.0)),
        ..o2
    };
    let grey = Style {
        colormap: ColorMap::Grey,
        stretch: Stretch::Log,
        limits: Limits::Values(2.0e21, 5.0e22),
        ..Style::default()
    };
    std::fs::write(
        format!("{out}/map_pixels_grey.png"),
        render_png(&o3, &grey).unwrap(),
    )
    .unwrap();

    // A narrow strip of the map, at single-column width.
    let strip = Style {
        region: Some((130, 0, 60, 240)),
        width_px: 1000,
        stretch: Stretch::Sqrt,
        colormap: ColorMap::Cividis,
        ..Style::default()
    };
    let o4 = Overlay {
        sky: Some(&eq),
        title: Some("Strip".into()),
        ..o3
    };
    std::fs::write(
        format!("{out}/map_strip.png"),
        render_png(&o4, &strip).unwrap(),
    )
    .unwrap();

    // The tree: two branches under one root.
    let mut nodes = vec![
        TreeNode {
            id: 100,
            parent: None,
            top: 5.0e22,
            bottom: 4.0e21,
            is_leaf: false,
            state: None,
            show_id: true,
        },
        TreeNode {
            id: 101,
            parent: Some(100),
            top: 5.0e22,
            bottom: 9.0e21,
            is_leaf: false,
            state: None,
            show_id: true,
        },
        TreeNode {
            id: 102,
            parent: Some(100),
            top: 3.0e22,
            bottom: 9.0e21,
            is_leaf: false,
            state: None,
            show_id: true,
        },
    ];
    let parents = [102, 101, 101, 102, 100, 100];
    for (i, &(_, _, _, a)) in cores.iter().enumerate() {
        let parent = parents[i];
        nodes.push(TreeNode {
            id: i as u32 + 1,
            parent: Some(parent),
            top: a + 3.0e21,
            bottom: if parent == 100 {
                9.0e21
            } else if parent == 101 {
                2.0e22
            } else {
                1.5e22
            },
            is_leaf: true,
            state: Some(leaves[i].state),
            show_id: true,
        });
    }
    let ts = Style {
        width_px: 1200,
        ..Style::default()
    };
    std::fs::write(
        format!("{out}/tree.png"),
        tree_png(&nodes, &states, "N(H_2) [cm^-2]", &ts).unwrap(),
    )
    .unwrap();
    std::fs::write(
        format!("{out}/tree.svg"),
        tree_svg(&nodes, &states, "N(H_2) [cm^-2]", &ts).unwrap(),
    )
    .unwrap();
    let tl = Style {
        stretch: Stretch::Log,
        ..ts
    };
    std::fs::write(
        format!("{out}/tree_log.png"),
        tree_png(&nodes, &states, "N(H_2) [cm^-2]", &tl).unwrap(),
    )
    .unwrap();
}

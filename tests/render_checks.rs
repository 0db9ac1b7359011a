//! Checks of the figure module on invented maps: outline geometry, beam and scale bar sizes,
//! well-formed SVG and decodable PNG, tick positions against the sky mapping, determinism.

use cairn::render::{
    self, AxisTicks, Coord, Edge, LeafStyle, Limits, Overlay, SkyAxes, StateLegend, Stretch, Style,
    TreeNode, axis_ticks, beam_geometry, overlay_layout, render_png, render_svg, trace_outlines,
    tree_png, tree_svg,
};
#[path = "common/mod.rs"]
mod common;
#[path = "common/svg_layout.rs"]
mod svg_layout;

use ndarray::{Array2, array};
use proptest::prelude::*;
use std::collections::BTreeMap;

/// A flat mapping: pixel offsets turned by `rot_deg`, scaled, added to a reference point;
/// longitude runs to the left (east left) and is stretched by 1/cos(lat0).
struct Flat {
    lon0: f64,
    lat0: f64,
    scale: f64,
    rot_deg: f64,
    equatorial: bool,
}

impl SkyAxes for Flat {
    fn pixel_to_sky(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let (s, c) = self.rot_deg.to_radians().sin_cos();
        let u = c * x - s * y;
        let v = s * x + c * y;
        let lon = self.lon0 - u * self.scale / self.lat0.to_radians().cos();
        Some((lon.rem_euclid(360.0), self.lat0 + v * self.scale))
    }
    fn sky_to_pixel(&self, lon: f64, lat: f64) -> Option<(f64, f64)> {
        let dl = (lon - self.lon0 + 540.0).rem_euclid(360.0) - 180.0;
        let u = -dl * self.lat0.to_radians().cos() / self.scale;
        let v = (lat - self.lat0) / self.scale;
        let (s, c) = self.rot_deg.to_radians().sin_cos();
        Some((c * u + s * v, -s * u + c * v))
    }
    fn equatorial(&self) -> bool {
        self.equatorial
    }
    fn pixel_scale_deg(&self) -> f64 {
        self.scale
    }
}

/// A gnomonic projection turned by `rot_deg` (curved lines of constant coordinate).
struct Tan {
    crval: (f64, f64),
    scale: f64,
    rot_deg: f64,
}

impl SkyAxes for Tan {
    fn pixel_to_sky(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        let (s, c) = self.rot_deg.to_radians().sin_cos();
        let xi = (-(c * x - s * y) * self.scale).to_radians();
        let eta = ((s * x + c * y) * self.scale).to_radians();
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
        let (s, c) = self.rot_deg.to_radians().sin_cos();
        let (u, v) = (-xi, eta);
        Some((c * u + s * v, -s * u + c * v))
    }
    fn equatorial(&self) -> bool {
        true
    }
    fn pixel_scale_deg(&self) -> f64 {
        self.scale
    }
}

/// A label map with a leaf holding a hole (1), a leaf touching it (2), a leaf on the map's
/// edge in two parts (3), and two pixels meeting only at a corner (4).
fn tricky_labels() -> Array2<i32> {
    array![
        [3, 3, -1, -1, -1, -1, -1, -1, -1, 4],
        [3, -1, 1, 1, 1, 1, 2, 2, 4, -1],
        [-1, -1, 1, -1, -1, 1, 2, 2, -1, -1],
        [-1, -1, 1, -1, 1, 1, 2, -1, -1, -1],
        [-1, -1, 1, 1, 1, 1, -1, -1, -1, 3],
        [-1, -1, -1, -1, -1, -1, -1, -1, 3, 3],
    ]
}

type Corner = (i64, i64);

/// Boundary unit edges of the footprint of `id`, each as a sorted pair of corners in doubled
/// coordinates (corner (x - 0.5, y - 0.5) of pixel (x, y) is (2x - 1, 2y - 1)).
fn boundary_edges(l: &Array2<i32>, id: i32) -> BTreeMap<(Corner, Corner), usize> {
    let (h, w) = l.dim();
    let at = |x: i64, y: i64| {
        if x < 0 || y < 0 || x >= w as i64 || y >= h as i64 {
            -1
        } else {
            l[[y as usize, x as usize]]
        }
    };
    let mut e = BTreeMap::new();
    for y in 0..h as i64 {
        for x in 0..w as i64 {
            if at(x, y) != id {
                continue;
            }
            let (x0, x1, y0, y1) = (2 * x - 1, 2 * x + 1, 2 * y - 1, 2 * y + 1);
            if at(x, y - 1) != id {
                *e.entry(((x0, y0), (x1, y0))).or_insert(0) += 1;
            }
            if at(x, y + 1) != id {
                *e.entry(((x0, y1), (x1, y1))).or_insert(0) += 1;
            }
            if at(x - 1, y) != id {
                *e.entry(((x0, y0), (x0, y1))).or_insert(0) += 1;
            }
            if at(x + 1, y) != id {
                *e.entry(((x1, y0), (x1, y1))).or_insert(0) += 1;
            }
        }
    }
    e
}

/// Doubled integer coordinates of a corner, or None if the point is not on a pixel corner.
fn corner(p: (f64, f64), tol: f64) -> Option<Corner> {
    let cx = 2.0 * p.0;
    let cy = 2.0 * p.1;
    let (rx, ry) = (cx.round(), cy.round());
    let odd = |v: f64| (v as i64).rem_euclid(2) == 1;
    ((cx - rx).abs() <= tol && (cy - ry).abs() <= tol && odd(rx) && odd(ry))
        .then_some((rx as i64, ry as i64))
}

/// True if the footprint of `id` changes at corner `c`: of the four pixels sharing it, some
/// carry the id and some do not.
fn footprint_changes_at(l: &Array2<i32>, id: i32, c: Corner) -> bool {
    let (h, w) = l.dim();
    let (px, py) = ((c.0 + 1) / 2, (c.1 + 1) / 2); // pixel whose lower-left corner is c
    let mut inside = 0;
    for (x, y) in [(px - 1, py - 1), (px, py - 1), (px - 1, py), (px, py)] {
        if x >= 0 && y >= 0 && x < w as i64 && y < h as i64 && l[[y as usize, x as usize]] == id {
            inside += 1;
        }
    }
    inside > 0 && inside < 4
}

/// Checks rings of one leaf against its footprint; rings are given in map pixel coordinates.
fn check_rings(l: &Array2<i32>, id: i32, rings: &[Vec<(f64, f64)>], tol: f64) {
    let mut covered: BTreeMap<(Corner, Corner), usize> = BTreeMap::new();
    for ring in rings {
        assert!(
            ring.len() >= 4,
            "leaf {id}: a ring has {} corners",
            ring.len()
        );
        let cs: Vec<Corner> = ring
            .iter()
            .map(|&p| corner(p, tol).unwrap_or_else(|| panic!("leaf {id}: {p:?} is off-corner")))
            .collect();
        for (i, &a) in cs.iter().enumerate() {
            assert!(
                footprint_changes_at(l, id, a),
                "leaf {id}: vertex {a:?} is not where the footprint changes"
            );
            let b = cs[(i + 1) % cs.len()];
            assert!(
                a.0 == b.0 || a.1 == b.1,
                "leaf {id}: diagonal step {a:?}-{b:?}"
            );
            // Collinear edges are merged: the path turns at every vertex.
            let prev = cs[(i + cs.len() - 1) % cs.len()];
            let turn = (a.0 - prev.0) * (b.1 - a.1) - (a.1 - prev.1) * (b.0 - a.0);
            assert!(
                turn != 0,
                "leaf {id}: vertex {a:?} lies inside a straight run"
            );
            // Split the side into unit edges.
            let n = ((b.0 - a.0).abs() + (b.1 - a.1).abs()) / 2;
            assert!(n >= 1, "leaf {id}: repeated vertex {a:?}");
            let (sx, sy) = ((b.0 - a.0).signum() * 2, (b.1 - a.1).signum() * 2);
            for k in 0..n {
                let p = (a.0 + k * sx, a.1 + k * sy);
                let q = (p.0 + sx, p.1 + sy);
                let key = if p < q { (p, q) } else { (q, p) };
                *covered.entry(key).or_insert(0) += 1;
            }
        }
    }
    let expected = boundary_edges(l, id);
    assert_eq!(
        covered, expected,
        "leaf {id}: the path does not cover each boundary edge exactly once"
    );
}

#[test]
fn outline_vertices_are_boundary_corners_and_cover_every_boundary_edge() {
    let l = tricky_labels();
    let traced = trace_outlines(l.view(), (0.0, 0.0));
    let ids: Vec<i32> = traced.keys().copied().collect();
    assert_eq!(ids, vec![1, 2, 3, 4]);
    for (&id, rings) in &traced {
        check_rings(&l, id, rings, 1e-12);
    }
    // Leaf 1 has its outer ring and one hole; leaves 3 and 4 come in two parts each.
    assert_eq!(traced[&1].len(), 2);
    assert_eq!(traced[&3].len(), 2);
    assert_eq!(traced[&4].len(), 2);
}

proptest! {
    #[test]
    fn outlines_of_random_label_maps_cover_every_boundary_edge(
        cells in proptest::collection::vec(-1i32..3, 7 * 9)
    ) {
        let l = Array2::from_shape_vec((7, 9), cells).unwrap();
        let traced = trace_outlines(l.view(), (0.0, 0.0));
        for id in 0..3 {
            let present = l.iter().any(|&v| v == id);
            prop_assert_eq!(present, traced.contains_key(&id));
            if let Some(rings) = traced.get(&id) {
                check_rings(&l, id, rings, 1e-12);
            }
        }
    }
}

fn states() -> Vec<StateLegend> {
    vec![
        StateLegend {
            name: "bound".into(),
            description: "virial parameter below 2".into(),
        },
        StateLegend {
            name: "unbound".into(),
            description: String::new(),
        },
        StateLegend {
            name: "unknown".into(),
            description: String::new(),
        },
    ]
}

/// An invented smooth map the size of `labels`, with some missing pixels.
fn smooth_map(h: usize, w: usize) -> Array2<f32> {
    Array2::from_shape_fn((h, w), |(y, x)| {
        if x == 0 && y == 0 {
            f32::NAN
        } else {
            (1.0e21 * (1.0 + (x as f64 * 0.7).sin() + 0.3 * y as f64)) as f32
        }
    })
}

fn leaves_of(l: &Array2<i32>) -> Vec<LeafStyle> {
    let mut ids: Vec<i32> = l.iter().copied().filter(|&v| v >= 0).collect();
    ids.sort();
    ids.dedup();
    ids.iter()
        .enumerate()
        .map(|(i, &id)| {
            let (y, x) = l
                .indexed_iter()
                .find(|&(_, &v)| v == id)
                .map(|(p, _)| p)
                .unwrap();
            LeafStyle {
                id,
                label: id.to_string(),
                state: i % 3,
                peak: (x as f64, y as f64),
            }
        })
        .collect()
}

/// Parses an SVG path of M/L/Z commands into rings.
fn parse_rings(d: &str) -> Vec<Vec<(f64, f64)>> {
    let mut rings = Vec::new();
    let mut cur: Vec<(f64, f64)> = Vec::new();
    let mut tok = String::new();
    let mut cmds: Vec<(char, String)> = Vec::new();
    for ch in d.chars() {
        if ch.is_ascii_alphabetic() {
            if let Some(last) = cmds.last_mut() {
                last.1 = std::mem::take(&mut tok);
            }
            cmds.push((ch, String::new()));
        } else {
            tok.push(ch);
        }
    }
    if let Some(last) = cmds.last_mut() {
        last.1 = tok;
    }
    for (c, args) in cmds {
        let v: Vec<f64> = args
            .split_whitespace()
            .map(|s| s.parse().unwrap())
            .collect();
        match c {
            'M' | 'L' => cur.push((v[0], v[1])),
            'Z' => rings.push(std::mem::take(&mut cur)),
            other => panic!("unexpected command {other} in a leaf outline"),
        }
    }
    rings
}

/// The leaf paths of an overlay's SVG, in map pixels: (leaf id, its rings).
fn drawn_leaf_rings(o: &Overlay, style: &Style) -> Vec<(i32, Vec<cairn::render::Ring>)> {
    let svg = render_svg(o, style).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("the SVG is well-formed XML");
    let lay = overlay_layout(o, style).unwrap();
    let mut out = Vec::new();
    for n in doc.descendants().filter(|n| n.has_tag_name("path")) {
        let class = n.attribute("class").unwrap_or("");
        if !class.split_whitespace().any(|c| c == "leaf") {
            continue;
        }
        let id: i32 = n
            .attribute("id")
            .and_then(|s| s.strip_prefix("leaf-"))
            .expect("leaf paths are named leaf-ID")
            .parse()
            .unwrap();
        let rings: Vec<cairn::render::Ring> = parse_rings(n.attribute("d").unwrap())
            .into_iter()
            .map(|r| {
                r.into_iter()
                    .map(|(fx, fy)| lay.figure_to_map(fx, fy))
                    .collect()
            })
            .collect();
        out.push((id, rings));
    }
    out
}

#[test]
fn svg_is_well_formed_with_one_outline_path_per_leaf_on_exact_pixel_corners() {
    let l = tricky_labels();
    let map = smooth_map(6, 10);
    let o = Overlay {
        unit_label: "N(H_2) [cm^-2]".into(),
        beam: None,
        scale_bar: Some((3.0, "0.1 pc".into())),
        title: Some("Test".into()),
        name: None,
        ..plain_overlay(&map, &l, leaves_of(&l))
    };
    let style = Style {
        width_px: 900,
        dpi: 150.0,
        ..Style::default()
    };
    let lay = overlay_layout(&o, &style).unwrap();
    let traced = trace_outlines(l.view(), (0.0, 0.0));
    let mut seen = BTreeMap::new();
    for (id, rings) in drawn_leaf_rings(&o, &style) {
        *seen.entry(id).or_insert(0) += 1;
        // The drawn path, taken back to map pixels, lies on the traced boundary corners.
        let tol = 2.0 * 0.006 / lay.kx.min(lay.ky);
        check_rings(&l, id, &rings, tol);
        assert_eq!(rings.len(), traced[&id].len());
    }
    let expected: BTreeMap<i32, i32> = traced.keys().map(|&k| (k, 1)).collect();
    assert_eq!(seen, expected, "exactly one outline path per leaf");
}

/// With a beam, a footprint's holes and separate pieces enclosing less than one beam area
/// (pi / (4 ln 2) FWHM_major FWHM_minor, common practice for a Gaussian beam) are not
/// outlined, except its largest ring: the 3-pixel hole of leaf 1, the second 3-pixel part
/// of leaf 3 and the second pixel of leaf 4 go under a 2 x 1.5 pixel beam (3.40 pixels);
/// under a 1.5 x 1 pixel beam (1.70 pixels) only leaf 4's single pixel does.
#[test]
fn rings_smaller_than_the_beam_are_not_outlined_but_each_footprints_largest_is() {
    let l = tricky_labels();
    let map = smooth_map(6, 10);
    let style = Style {
        width_px: 900,
        dpi: 150.0,
        ..Style::default()
    };
    let traced = trace_outlines(l.view(), (0.0, 0.0));
    for (beam, counts) in [
        ((2.0, 1.5, 40.0), [(1, 1), (2, 1), (3, 1), (4, 1)]),
        ((1.5, 1.0, 40.0), [(1, 2), (2, 1), (3, 2), (4, 1)]),
    ] {
        let o = Overlay {
            beam: Some(beam),
            ..plain_overlay(&map, &l, leaves_of(&l))
        };
        let lay = overlay_layout(&o, &style).unwrap();
        let tol = 2.0 * 0.006 / lay.kx.min(lay.ky);
        let beam_px = std::f64::consts::PI / (4.0 * std::f64::consts::LN_2) * beam.0 * beam.1;
        let drawn = drawn_leaf_rings(&o, &style);
        let got: Vec<(i32, usize)> = drawn.iter().map(|(id, r)| (*id, r.len())).collect();
        let mut got = got;
        got.sort();
        assert_eq!(got, counts.to_vec(), "beam {beam:?}");
        for (id, rings) in &drawn {
            for ring in rings {
                // Each drawn ring is one of the traced rings, at least a beam in area unless
                // it is the footprint's only one drawn.
                let twin = traced[id].iter().find(|t| {
                    t.len() == ring.len()
                        && t.iter().all(|&(x, y)| {
                            ring.iter()
                                .any(|&(a, b)| (a - x).abs() <= tol && (b - y).abs() <= tol)
                        })
                });
                let twin =
                    twin.unwrap_or_else(|| panic!("leaf {id}: a drawn ring is no traced ring"));
                assert!(
                    rings.len() == 1 || cairn::render::ring_area(twin).abs() >= beam_px,
                    "leaf {id}: a ring under a beam's area is drawn beside another"
                );
            }
        }
    }
}

/// Branch outlines traced through a relabelling of the leaf label map (`branch_of`, what
/// `draw --branches` uses) are the same figure as those traced from a relabelled copy.
#[test]
fn branch_outlines_through_a_relabelling_equal_those_of_a_relabelled_copy() {
    let l = tricky_labels();
    let map = smooth_map(6, 10);
    // Labels 1 and 2 form branch 7, label 3 branch 8, label 4 none; 9 and up are unknown.
    let of = [-1, 7, 7, 8, -1];
    let copy = l.mapv(|v| if v >= 0 { of[v as usize] } else { -1 });
    let overlay = |branch_labels, branch_of| Overlay {
        map: map.view(),
        unit_label: "K".into(),
        labels: l.view(),
        branch_labels,
        branch_of,
        leaves: leaves_of(&l),
        states: states(),
        sky: None,
        beam: None,
        scale_bar: None,
        title: None,
        name: None,
    };
    for (width_px, region) in [(700, None), (640, Some((2, 1, 5, 4)))] {
        let style = Style {
            width_px,
            dpi: 100.0,
            show_branches: true,
            region,
            ..Style::default()
        };
        let a = render_svg(&overlay(Some(copy.view()), None), &style).unwrap();
        let b = render_svg(&overlay(Some(l.view()), Some(&of)), &style).unwrap();
        assert_eq!(a, b);
        assert!(a.contains("id=\"branch-7\"") && a.contains("id=\"branch-8\""));
        assert!(!a.contains("id=\"branch-4\""));
        let a = render_png(&overlay(Some(copy.view()), None), &style).unwrap();
        let b = render_png(&overlay(Some(l.view()), Some(&of)), &style).unwrap();
        assert_eq!(a, b);
    }
}

#[test]
fn png_decodes_to_the_requested_width_and_output_is_deterministic() {
    let l = tricky_labels();
    let map = smooth_map(6, 10);
    let sky = Flat {
        lon0: 133.8,
        lat0: -6.7,
        scale: 2.0 / 3600.0,
        rot_deg: 15.0,
        equatorial: true,
    };
    let o = Overlay {
        map: map.view(),
        unit_label: "MJy/sr".into(),
        labels: l.view(),
        branch_labels: Some(l.view()),
        branch_of: None,
        leaves: leaves_of(&l),
        states: states(),
        sky: Some(&sky),
        beam: Some((2.0, 1.0, 0.0)),
        scale_bar: Some((3.0, "0.1 pc".into())),
        title: None,
        name: None,
    };
    for style in [
        Style {
            width_px: 700,
            dpi: 100.0,
            show_branches: true,
            ..Style::default()
        },
        Style {
            width_px: 640,
            dpi: 120.0,
            stretch: Stretch::Log,
            limits: Limits::Values(1.0e21, 6.0e21),
            colormap: render::ColorMap::Grey,
            region: Some((2, 1, 5, 4)),
            ..Style::default()
        },
    ] {
        let png = render_png(&o, &style).unwrap();
        let img = image::load_from_memory(&png).expect("the PNG decodes");
        let lay = overlay_layout(&o, &style).unwrap();
        assert_eq!(img.width(), style.width_px);
        assert_eq!(img.height(), lay.height);
        assert_eq!(png, render_png(&o, &style).unwrap(), "PNG bytes repeat");
        let svg = render_svg(&o, &style).unwrap();
        assert_eq!(svg, render_svg(&o, &style).unwrap(), "SVG text repeats");
        roxmltree::Document::parse(&svg).expect("the SVG is well-formed XML");
    }
}

/// `narrowest_width_px` is a lower bound that the layout keeps: one pixel narrower is refused
/// for a map without sky axes (tick labels narrower than the sky's), at several resolutions,
/// and some width above it is drawn. Common practice (a layout check of this project).
#[test]
fn figures_narrower_than_the_narrowest_width_are_refused() {
    let l = tricky_labels();
    let map = smooth_map(6, 10);
    let o = plain_overlay(&map, &l, leaves_of(&l));
    for dpi in [30.0, 72.0, 300.0, 2400.0] {
        let narrowest = render::narrowest_width_px(dpi);
        let style = |width_px: u32| Style {
            width_px,
            dpi,
            ..Style::default()
        };
        assert!(
            overlay_layout(&o, &style(narrowest - 1)).is_err(),
            "{dpi} dpi: {narrowest} px"
        );
        let drawn = (narrowest..)
            .step_by(50)
            .take(100)
            .find(|&w| overlay_layout(&o, &style(w)).is_ok());
        assert!(
            drawn.is_some(),
            "{dpi} dpi: nothing drawn from {narrowest} px"
        );
    }
}

#[test]
fn beam_axes_equal_the_given_fwhm_and_point_along_the_angle() {
    let len = |v: (f64, f64)| v.0.hypot(v.1);
    let b = beam_geometry(8.0, 5.0, 0.0, None, (10.0, 10.0));
    assert!((2.0 * len(b.semi_major) - 8.0).abs() < 1e-12);
    assert!((2.0 * len(b.semi_minor) - 5.0).abs() < 1e-12);
    // Position angle 0: major axis north (+y); 90: east (-x without sky coordinates).
    assert!(b.semi_major.0.abs() < 1e-12 && b.semi_major.1 > 0.0);
    let b = beam_geometry(8.0, 5.0, 90.0, None, (10.0, 10.0));
    assert!(b.semi_major.1.abs() < 1e-12 && b.semi_major.0 < 0.0);
    // With a sky mapping turned by 30 degrees the major axis follows the sky's north.
    let sky = Flat {
        lon0: 56.375,
        lat0: 0.0,
        scale: 1.0 / 3600.0,
        rot_deg: 30.0,
        equatorial: false,
    };
    // The beam's sizes follow the sky's own steps, and `Flat` takes cos(latitude) at its
    // centre rather than at the point: 1 - cos(0.002 deg) = 6e-10 of difference here.
    let b = beam_geometry(6.0, 3.0, 0.0, Some(&sky), (5.0, 5.0));
    assert!((2.0 * len(b.semi_major) - 6.0).abs() < 1e-8, "{b:?}");
    assert!((2.0 * len(b.semi_minor) - 3.0).abs() < 1e-8, "{b:?}");
    let (lon, lat) = sky.pixel_to_sky(5.0, 5.0).unwrap();
    let n = sky.sky_to_pixel(lon, lat + 1e-3).unwrap();
    let (nx, ny) = (n.0 - 5.0, n.1 - 5.0);
    let cosang = (nx * b.semi_major.0 + ny * b.semi_major.1) / (nx.hypot(ny) * 3.0);
    assert!(
        (cosang - 1.0).abs() < 1e-9,
        "major axis is not north: {cosang}"
    );
    // Axes are perpendicular.
    let dot = b.semi_major.0 * b.semi_minor.0 + b.semi_major.1 * b.semi_minor.1;
    assert!(dot.abs() < 1e-9);
    // The polygon drawn lies on the ellipse.
    for (x, y) in b.polygon(16) {
        let (dx, dy) = (x - 5.0, y - 5.0);
        let u = (dx * b.semi_major.0 + dy * b.semi_major.1) / len(b.semi_major).powi(2);
        let v = (dx * b.semi_minor.0 + dy * b.semi_minor.1) / len(b.semi_minor).powi(2);
        assert!((u * u + v * v - 1.0).abs() < 1e-9);
    }
}

#[test]
fn beam_in_the_figure_and_scale_bar_have_the_requested_sizes() {
    let l = Array2::from_elem((50, 80), -1);
    let map = smooth_map(50, 80);
    let o = Overlay {
        map: map.view(),
        unit_label: "K".into(),
        labels: l.view(),
        branch_labels: None,
        branch_of: None,
        leaves: Vec::new(),
        states: Vec::new(),
        sky: None,
        beam: Some((7.0, 4.0, 25.0)),
        scale_bar: Some((17.3, "1 pc".into())),
        title: None,
        name: None,
    };
    for (width, region) in [(1000, None), (600, Some((10, 5, 30, 20)))] {
        let style = Style {
            width_px: width,
            dpi: 150.0,
            region,
            ..Style::default()
        };
        let lay = overlay_layout(&o, &style).unwrap();
        let b = lay.beam.unwrap();
        let len = |v: (f64, f64)| v.0.hypot(v.1);
        assert!((2.0 * len(b.semi_major) - 7.0).abs() < 1e-9);
        assert!((2.0 * len(b.semi_minor) - 4.0).abs() < 1e-9);
        let (a, e) = lay.scale_bar.unwrap();
        let l_map = (e.0 - a.0).hypot(e.1 - a.1);
        assert!((l_map - 17.3).abs() < 0.5, "scale bar {l_map} pixels");
        // The bar drawn in the SVG: its first segment, back in map pixels.
        let svg = render_svg(&o, &style).unwrap();
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let bar = doc
            .descendants()
            .find(|n| n.attribute("class") == Some("scale-bar"))
            .expect("a scale bar is drawn");
        let d = bar.attribute("d").unwrap();
        let nums: Vec<f64> = d
            .split(|c: char| c.is_ascii_alphabetic() || c == ' ')
            .filter(|s| !s.is_empty())
            .take(4)
            .map(|s| s.parse().unwrap())
            .collect();
        let p = lay.figure_to_map(nums[0], nums[1]);
        let q = lay.figure_to_map(nums[2], nums[3]);
        let drawn = (q.0 - p.0).hypot(q.1 - p.1);
        assert!((drawn - 17.3).abs() < 0.5, "drawn scale bar {drawn} pixels");
    }
}

/// Parses a tick label back to degrees (or pixels).
fn parse_label(label: &str, coord: Coord, equatorial: bool) -> f64 {
    let t = render::plain_text(label).replace('\u{2212}', "-");
    if coord == Coord::X || coord == Coord::Y {
        return t.parse().unwrap();
    }
    if !equatorial {
        return t.trim_end_matches('°').parse().unwrap();
    }
    let (sign, body) = match t.strip_prefix('-') {
        Some(rest) => (-1.0, rest.to_string()),
        None => (1.0, t.clone()),
    };
    let mut total = 0.0;
    let mut num = String::new();
    for ch in body.chars() {
        let unit = match (coord, ch) {
            (Coord::Lon, 'h') => Some(15.0),
            (Coord::Lon, 'm') => Some(15.0 / 60.0),
            (Coord::Lon, 's') => Some(15.0 / 3600.0),
            (Coord::Lat, '°') => Some(1.0),
            (Coord::Lat, '′') => Some(1.0 / 60.0),
            (Coord::Lat, '″') => Some(1.0 / 3600.0),
            _ => None,
        };
        match unit {
            Some(u) => total += num.parse::<f64>().unwrap() * u,
            None => {
                num.push(ch);
                continue;
            }
        }
        num.clear();
    }
    sign * total
}

fn check_ticks(sky: &dyn SkyAxes, region: (usize, usize, usize, usize), t: &AxisTicks) {
    let (x0, y0, w, h) = region;
    let (xl, xr) = (x0 as f64 - 0.5, (x0 + w) as f64 - 0.5);
    let (yb, yt) = (y0 as f64 - 0.5, (y0 + h) as f64 - 0.5);
    let labelled: Vec<_> = t
        .ticks
        .iter()
        .filter(|k| matches!(k.edge, Edge::Bottom | Edge::Left))
        .collect();
    assert!(
        labelled.len() >= 4,
        "only {} labelled ticks",
        labelled.len()
    );
    let mut coords_seen = (false, false);
    for k in &t.ticks {
        let on_edge = match k.edge {
            Edge::Bottom => (k.y - yb).abs() < 1e-9 && k.x >= xl - 1e-9 && k.x <= xr + 1e-9,
            Edge::Top => (k.y - yt).abs() < 1e-9 && k.x >= xl - 1e-9 && k.x <= xr + 1e-9,
            Edge::Left => (k.x - xl).abs() < 1e-9 && k.y >= yb - 1e-9 && k.y <= yt + 1e-9,
            Edge::Right => (k.x - xr).abs() < 1e-9 && k.y >= yb - 1e-9 && k.y <= yt + 1e-9,
        };
        assert!(on_edge, "tick {k:?} is not on its frame edge");
        let (lon, lat) = sky.pixel_to_sky(k.x, k.y).unwrap();
        let err = match k.coord {
            Coord::Lon => {
                coords_seen.0 = true;
                ((lon - k.value + 540.0).rem_euclid(360.0) - 180.0).abs()
            }
            Coord::Lat => {
                coords_seen.1 = true;
                (lat - k.value).abs()
            }
            _ => panic!("pixel tick on a sky frame"),
        };
        assert!(err < 1e-6, "tick {k:?} is {err} degrees off");
        let parsed = parse_label(&k.label, k.coord, sky.equatorial());
        let perr = ((parsed - k.value + 540.0).rem_euclid(360.0) - 180.0).abs();
        assert!(
            perr < 1e-9,
            "label {} reads {parsed}, value {}",
            k.label,
            k.value
        );
    }
    assert!(coords_seen.0 && coords_seen.1);
}

#[test]
fn tick_positions_give_the_labelled_sky_values() {
    let region = (0, 0, 400, 300);
    for rot in [0.0, 20.0, -35.0] {
        for (equatorial, lon0, lat0) in
            [(true, 133.8, -6.7), (false, 0.05, 0.1), (true, 0.01, 30.0)]
        {
            let sky = Flat {
                lon0,
                lat0,
                scale: 3.0 / 3600.0,
                rot_deg: rot,
                equatorial,
            };
            let t = axis_ticks(Some(&sky), region, 6, 6);
            check_ticks(&sky, region, &t);
            if equatorial {
                assert!(t.bottom_title.starts_with("RA") || t.bottom_title.starts_with("Dec"));
            } else {
                assert!(t.bottom_title.starts_with("Galactic"));
            }
        }
    }
    // A curved projection and a zoomed region.
    let tan = Tan {
        crval: (196.8, 50.3),
        scale: 30.0 / 3600.0,
        rot_deg: 25.0,
    };
    let region = (0, 0, 600, 500);
    check_ticks(&tan, region, &axis_ticks(Some(&tan), region, 5, 5));
    check_ticks(
        &tan,
        (100, 50, 80, 60),
        &axis_ticks(Some(&tan), (100, 50, 80, 60), 5, 5),
    );
}

#[test]
fn pixel_axes_tick_at_round_pixel_values() {
    let t = axis_ticks(None, (10, 20, 300, 200), 6, 6);
    assert_eq!(t.bottom_title, "x [pixel]");
    let xs: Vec<f64> = t
        .ticks
        .iter()
        .filter(|k| k.edge == Edge::Bottom)
        .map(|k| k.x)
        .collect();
    assert!(xs.len() >= 3);
    for k in &t.ticks {
        let v = parse_label(&k.label, k.coord, false);
        let pos = if k.coord == Coord::X { k.x } else { k.y };
        assert_eq!(v, pos);
        assert_eq!(v, k.value);
    }
    // Equal spacing of round values.
    let step = xs[1] - xs[0];
    assert!(xs.windows(2).all(|p| (p[1] - p[0] - step).abs() < 1e-9));
    assert!([1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0].contains(&step));
}

fn tree_nodes() -> Vec<TreeNode> {
    let n = |id, parent, top, bottom, leaf, state| TreeNode {
        id,
        parent,
        top,
        bottom,
        is_leaf: leaf,
        state,
        show_id: true,
    };
    vec![
        n(10, None, 9.0, 1.0, false, None),
        n(11, Some(10), 9.0, 3.0, false, Some(1)),
        n(1, Some(11), 9.0, 5.0, true, Some(0)),
        n(2, Some(11), 6.0, 5.0, true, Some(1)),
        n(3, Some(10), 4.0, 3.0, true, Some(2)),
    ]
}

fn tree_style() -> Style {
    Style {
        width_px: 800,
        dpi: 150.0,
        ..Style::default()
    }
}

#[test]
fn tree_figure_has_one_path_per_structure_and_decodes() {
    let nodes = tree_nodes();
    let style = tree_style();
    let svg = tree_svg(&nodes, &states(), "level [K]", &style).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("the tree SVG is well-formed XML");
    let mut ids: Vec<String> = doc
        .descendants()
        .filter(|n| n.has_tag_name("path"))
        .filter_map(|n| n.attribute("id"))
        .filter(|id| id.starts_with("node-"))
        .map(str::to_string)
        .collect();
    ids.sort();
    assert_eq!(ids, ["node-1", "node-10", "node-11", "node-2", "node-3"]);
    let png = tree_png(&nodes, &states(), "level [K]", &style).unwrap();
    let img = image::load_from_memory(&png).unwrap();
    assert_eq!(img.width(), 800);
    assert_eq!(
        png,
        tree_png(&nodes, &states(), "level [K]", &style).unwrap()
    );
    // A log axis needs positive levels: with a level at zero the axis is linear (the same
    // figure as a linear stretch gives, but for the note that says so).
    let mut zero = tree_nodes();
    zero[0].bottom = 0.0;
    let log = Style {
        stretch: Stretch::Log,
        ..style
    };
    let note = "levels at or below zero: the level axis is linear, not logarithmic";
    let svg = tree_svg(&zero, &states(), "level", &log).unwrap();
    assert!(svg.contains(note), "the note is in the figure");
    let linear = tree_svg(&zero, &states(), "level", &style).unwrap();
    assert!(!linear.contains(note));
    assert!(tree_png(&zero, &states(), "level", &log).is_ok());
    let svg = tree_svg(&nodes, &states(), "level", &log).unwrap();
    assert!(
        !svg.contains(note),
        "positive levels keep the logarithmic axis"
    );
}

/// A binary tree of `n` leaves: the Cartesian tree (lowest merge at the root) over random merge
/// levels between neighbouring leaves; leaves get random peaks and states (some none).
fn random_tree(n: usize, seed: u64) -> Vec<TreeNode> {
    let mut s = seed;
    let mut rnd = || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let h: Vec<f64> = (0..n - 1).map(|_| 1.0 + 5.0 * rnd()).collect();
    let mut parent = vec![usize::MAX; h.len()];
    let mut stack: Vec<usize> = Vec::new();
    for i in 0..h.len() {
        let mut last = None;
        while stack.last().is_some_and(|&t| h[t] > h[i]) {
            last = stack.pop();
        }
        if let Some(l) = last {
            parent[l] = i;
        }
        if let Some(&t) = stack.last() {
            parent[i] = t;
        }
        stack.push(i);
    }
    let bid = |i: usize| (n + i) as u32;
    let mut nodes: Vec<TreeNode> = (0..h.len())
        .map(|i| TreeNode {
            id: bid(i),
            parent: (parent[i] != usize::MAX).then(|| bid(parent[i])),
            top: h[i],
            bottom: if parent[i] == usize::MAX {
                0.5
            } else {
                h[parent[i]]
            },
            is_leaf: false,
            state: None,
            show_id: true,
        })
        .collect();
    for l in 0..n {
        // A leaf's parent is the higher of the merges on either side of it.
        let p = match (l.checked_sub(1), (l < h.len()).then_some(l)) {
            (Some(a), Some(b)) => {
                if h[a] > h[b] {
                    a
                } else {
                    b
                }
            }
            (Some(a), None) => a,
            (None, Some(b)) => b,
            (None, None) => unreachable!("at least two leaves"),
        };
        let u = rnd();
        nodes.push(TreeNode {
            id: l as u32,
            parent: Some(bid(p)),
            top: h[p] + 0.1 + 3.0 * rnd(),
            bottom: h[p],
            is_leaf: true,
            state: (u >= 0.25).then_some((u * 12.0) as usize % 3),
            show_id: true,
        });
    }
    nodes
}

/// A tree of far more leaves than the figure has pixel columns is drawn as one path per state
/// (each pixel in the colour of the state most structures crossing it have), with a note that
/// says so, instead of one path per structure; a small tree keeps one path per structure (the
/// test above).
#[test]
fn trees_wider_than_the_figure_are_drawn_per_pixel_column() {
    let nodes = random_tree(30_000, 3);
    let style = tree_style();
    let svg = tree_svg(&nodes, &states(), "level [K]", &style).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("the tree SVG is well-formed XML");
    let paths: Vec<_> = doc
        .descendants()
        .filter(|n| n.has_tag_name("path"))
        .collect();
    assert!(
        paths
            .iter()
            .all(|p| !p.attribute("id").is_some_and(|i| i.starts_with("node-")))
    );
    let dense: Vec<_> = paths
        .iter()
        .filter(|p| p.attribute("class").is_some_and(|c| c.starts_with("dense")))
        .collect();
    // Three states and grey: every group is present somewhere on this tree.
    let mut classes: Vec<&str> = dense.iter().filter_map(|p| p.attribute("class")).collect();
    classes.sort();
    assert_eq!(
        classes,
        ["dense", "dense state-0", "dense state-1", "dense state-2"]
    );
    // Every run is a vertical segment one pixel wide, at a pixel column's centre.
    for p in &dense {
        assert_eq!(p.attribute("stroke-width"), Some("1"));
        let d = p.attribute("d").unwrap();
        let nums: Vec<f64> = d
            .split(['M', 'L', ' ', ','])
            .filter(|t| !t.is_empty())
            .map(|t| t.parse().unwrap())
            .collect();
        assert_eq!(nums.len() % 4, 0);
        for seg in nums.chunks(4) {
            assert_eq!(seg[0], seg[2]);
            assert_eq!(seg[0].fract(), 0.5);
            assert!(seg[3] > seg[1]);
        }
    }
    // 60,000 structures in well under a megabyte (one path each took about 15 MB).
    assert!(svg.len() < 1 << 20, "{} bytes", svg.len());
    let note = doc
        .descendants()
        .filter_map(|n| n.attribute("aria-label"))
        .collect::<Vec<_>>()
        .join(" ");
    assert!(note.contains("30000 leaves on"), "{note}");
    assert!(note.contains("each pixel shows the state of most structures crossing it"));
    let png = tree_png(&nodes, &states(), "level [K]", &style).unwrap();
    assert_eq!(image::load_from_memory(&png).unwrap().width(), 800);
    assert_eq!(
        png,
        tree_png(&nodes, &states(), "level [K]", &style).unwrap()
    );
}

#[test]
fn mismatched_inputs_are_refused_with_a_sentence() {
    let map = smooth_map(6, 10);
    let l = Array2::from_elem((5, 10), -1);
    let o = Overlay {
        states: Vec::new(),
        ..plain_overlay(&map, &l, Vec::new())
    };
    let e = render_png(&o, &Style::default()).unwrap_err();
    assert!(e.to_string().contains("leaf label map is 10 x 5"), "{e}");
    let l = Array2::from_elem((6, 10), -1);
    let o = Overlay {
        labels: l.view(),
        ..o
    };
    let bad_region = Style {
        region: Some((5, 0, 6, 6)),
        ..Style::default()
    };
    assert!(matches!(
        render_png(&o, &bad_region),
        Err(render::RenderError::BadRegion(_))
    ));
    let swapped = Style {
        limits: Limits::Values(5.0, 1.0),
        ..Style::default()
    };
    let e = render_svg(&o, &swapped).unwrap_err();
    assert!(e.to_string().contains("swap them"), "{e}");
}

#[test]
fn leaf_labels_do_not_overlap_each_other() {
    // Many small leaves packed closely, so labels compete for room (rows far enough apart
    // for a label between them to be nearer its own leaf than the next row's).
    let (h, w) = (60, 90);
    let mut l = Array2::from_elem((h, w), -1);
    for ((y, x), v) in l.indexed_iter_mut() {
        if x % 6 < 3 && y % 8 < 3 {
            *v = ((y / 8) * 15 + x / 6) as i32;
        }
    }
    let map = smooth_map(h, w);
    let leaves: Vec<LeafStyle> = leaves_of(&l)
        .into_iter()
        .map(|mut s| {
            s.label = format!("{}", 1000 + s.id);
            s.peak = (s.peak.0 + 1.0, s.peak.1 + 1.0);
            s
        })
        .collect();
    let o = Overlay {
        map: map.view(),
        unit_label: "K".into(),
        labels: l.view(),
        branch_labels: None,
        branch_of: None,
        leaves,
        states: states(),
        sky: None,
        beam: Some((3.0, 2.0, 10.0)),
        scale_bar: Some((10.0, "1 pc".into())),
        title: None,
        name: None,
    };
    let style = Style {
        width_px: 1200,
        dpi: 200.0,
        ..Style::default()
    };
    let svg = render_svg(&o, &style).unwrap();
    let boxes = label_boxes(&svg);
    assert!(boxes.len() >= 10, "only {} labels placed", boxes.len());
    for (i, a) in boxes.iter().enumerate() {
        for b in &boxes[i + 1..] {
            let ox = a.2.min(b.2) - a.0.max(b.0);
            let oy = a.3.min(b.3) - a.1.max(b.1);
            assert!(ox <= 0.0 || oy <= 0.0, "labels {a:?} and {b:?} overlap");
        }
    }
}

/// An overlay of `map` and its label map with no beam, scale bar, sky axes or title.
fn plain_overlay<'a>(
    map: &'a Array2<f32>,
    labels: &'a Array2<i32>,
    leaves: Vec<LeafStyle>,
) -> Overlay<'a> {
    Overlay {
        map: map.view(),
        unit_label: "K".into(),
        labels: labels.view(),
        branch_labels: None,
        branch_of: None,
        leaves,
        states: states(),
        sky: None,
        beam: None,
        scale_bar: None,
        title: None,
        name: None,
    }
}

/// The numbers of an SVG path's data, in order (commands dropped).
fn path_numbers(d: &str) -> Vec<f64> {
    d.split(|c: char| c.is_ascii_alphabetic() || c == ' ')
        .filter(|s| !s.is_empty())
        .map(|s| s.parse().unwrap())
        .collect()
}

/// The bounding box of each leaf label's glyph outlines in an SVG figure.
fn label_boxes(svg: &str) -> Vec<(f64, f64, f64, f64)> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let mut boxes = Vec::new();
    for n in doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("leaf-label"))
    {
        let nums = path_numbers(n.attribute("d").unwrap());
        let mut b = (f64::MAX, f64::MAX, f64::MIN, f64::MIN);
        for p in nums.chunks(2) {
            b = (b.0.min(p[0]), b.1.min(p[1]), b.2.max(p[0]), b.3.max(p[1]));
        }
        boxes.push(b);
    }
    boxes
}

/// The leader lines of an SVG figure, as (start, end).
fn leaders(svg: &str) -> Vec<((f64, f64), (f64, f64))> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.attribute("class") == Some("leaf-leader"))
        .map(|n| {
            let v = path_numbers(n.attribute("d").unwrap());
            assert_eq!(v.len(), 4, "a leader is one straight segment");
            ((v[0], v[1]), (v[2], v[3]))
        })
        .collect()
}

#[test]
fn crowded_leaves_get_leader_lines_or_are_counted_as_unlabelled() {
    // A tight cluster of 2 x 2 pixel leaves, one every 3 pixels, in the middle of an empty
    // map: too many labels for the room beside the leaves, plenty of room around the cluster.
    let (h, w) = (96, 96);
    let mut l = Array2::from_elem((h, w), -1);
    for ((y, x), v) in l.indexed_iter_mut() {
        let (cx, cy) = (x as i64 - 36, y as i64 - 36);
        if (0..24).contains(&cx) && (0..24).contains(&cy) && cx % 3 < 2 && cy % 3 < 2 {
            *v = ((cy / 3) * 8 + cx / 3) as i32;
        }
    }
    let map = smooth_map(h, w);
    let leaves = leaves_of(&l);
    let n = leaves.len();
    let (mut left_out, mut all_leaders, mut sizes) = (Vec::new(), 0, Vec::new());
    for width in [500, 700, 900, 1200, 1600] {
        let o = plain_overlay(&map, &l, leaves.clone());
        let style = Style {
            width_px: width,
            dpi: 150.0,
            ..Style::default()
        };
        let fig = render::render_map_figure(&o, &style).unwrap();
        // The figure drawn once in both formats is the figure each function draws alone.
        assert_eq!(fig.svg, render_svg(&o, &style).unwrap());
        assert_eq!(fig.png, render_png(&o, &style).unwrap());
        let boxes = label_boxes(&fig.svg);
        assert_eq!(fig.leaves_in_frame, n);
        assert_eq!(
            boxes.len() + fig.labels_left_out,
            n,
            "every leaf is labelled or counted as left out ({width} px)"
        );
        left_out.push(fig.labels_left_out);
        let label_pt = fig.smaller_label_pt.unwrap_or(render::USUAL_LABEL_PT);
        sizes.push(label_pt);
        // Labels too many for the usual size are set smaller, down to the least size; the
        // drawn digits are as tall as that size says (DejaVu Sans digits are 0.729 em tall,
        // 1493 of 2048 font units, and round ones overshoot a little, to about 0.756 em, read
        // from the font's glyph outlines).
        assert!(
            (render::LEAST_LABEL_PT..=render::USUAL_LABEL_PT).contains(&label_pt),
            "{label_pt}"
        );
        let px_per_pt = style.dpi / 72.0;
        for b in &boxes {
            let em = (b.3 - b.1) / (label_pt * px_per_pt);
            assert!(
                (0.72..0.77).contains(&em),
                "a label {em} em tall ({width} px)"
            );
        }
        // Each id is nearest its own leaf, or on a leader line starting on its own leaf.
        let (n_labels, n_leaders) = svg_layout::check_leaf_labels(&fig.svg, 0.02);
        assert_eq!(
            (n_labels, n_leaders),
            (boxes.len(), leaders(&fig.svg).len())
        );
        for (i, a) in boxes.iter().enumerate() {
            for b in &boxes[i + 1..] {
                let ox = a.2.min(b.2) - a.0.max(b.0);
                let oy = a.3.min(b.3) - a.1.max(b.1);
                assert!(ox <= 0.0 || oy <= 0.0, "labels {a:?} and {b:?} overlap");
            }
        }
        let lines = leaders(&fig.svg);
        assert!(lines.len() <= boxes.len());
        all_leaders += lines.len();
        for &(a, b) in &lines {
            // The leader ends beside a label (within the label's padding of its glyphs) ...
            let near = |p: (f64, f64), bx: &(f64, f64, f64, f64)| {
                let dx = (bx.0 - p.0).max(p.0 - bx.2).max(0.0);
                let dy = (bx.1 - p.1).max(p.1 - bx.3).max(0.0);
                dx.hypot(dy) < 0.5 * (bx.3 - bx.1)
            };
            assert!(
                boxes.iter().any(|bx| near(b, bx)),
                "leader {a:?}-{b:?} ends at no label"
            );
            // ... and passes through no label's glyphs on the way.
            for k in 0..=100 {
                let t = k as f64 / 100.0;
                let p = (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
                for bx in &boxes {
                    assert!(
                        !(p.0 > bx.0 && p.0 < bx.2 && p.1 > bx.1 && p.1 < bx.3),
                        "leader {a:?}-{b:?} crosses label {bx:?}"
                    );
                }
            }
        }
    }
    // Narrow figures leave labels out (and say how many); some labels go out on leader lines;
    // a figure wide enough labels every leaf.
    assert!(left_out[0] > 0, "{left_out:?}");
    assert!(all_leaders > 0);
    assert_eq!(left_out.last(), Some(&0), "{left_out:?}");
    assert!(left_out.windows(2).all(|w| w[1] <= w[0]), "{left_out:?}");
    // The narrowest figure sets its labels smaller than usual to fit more of them; the widest
    // has room for every label at the usual size.
    assert!(sizes[0] < render::USUAL_LABEL_PT, "{sizes:?}");
    assert_eq!(sizes.last(), Some(&render::USUAL_LABEL_PT), "{sizes:?}");
}

#[test]
fn outlines_of_a_map_larger_than_its_figure_keep_exact_corners_within_half_a_figure_pixel() {
    // Ragged footprints on a map of 1500 x 1200 pixels drawn 500 pixels wide: about three map
    // pixels per figure pixel, so the traced staircases are finer than the figure.
    let (h, w) = (1200, 1500);
    let mut l = Array2::from_elem((h, w), -1);
    for ((y, x), v) in l.indexed_iter_mut() {
        let (cx, cy) = (x % 300, y % 300);
        let r = ((cx as f64 - 150.0).powi(2) + (cy as f64 - 150.0).powi(2)).sqrt();
        // A wavy disc per cell, its edge broken by a fine checker pattern.
        let edge = 90.0 + 25.0 * ((x / 7) as f64).sin() + if (x + y) % 2 == 0 { 3.0 } else { 0.0 };
        if r < edge {
            *v = ((y / 300) * 5 + x / 300) as i32;
        }
    }
    let map = smooth_map(h, w);
    let o = plain_overlay(&map, &l, leaves_of(&l));
    let style = Style {
        width_px: 500,
        dpi: 100.0,
        ..Style::default()
    };
    let lay = overlay_layout(&o, &style).unwrap();
    assert!(
        lay.kx < 0.5,
        "the test wants map pixels smaller than figure pixels"
    );
    let svg = render_svg(&o, &style).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let traced = trace_outlines(l.view(), (0.0, 0.0));
    let (mut drawn_corners, mut traced_corners) = (0, 0);
    let mut seen = BTreeMap::new();
    for n in doc.descendants().filter(|n| n.has_tag_name("path")) {
        let class = n.attribute("class").unwrap_or("");
        if !class.split_whitespace().any(|c| c == "leaf") {
            continue;
        }
        let id: i32 = n.attribute("id").unwrap()[5..].parse().unwrap();
        *seen.entry(id).or_insert(0) += 1;
        let drawn = parse_rings(n.attribute("d").unwrap());
        // Every drawn corner is a traced corner (to the SVG's 0.01 px).
        let corners: Vec<(f64, f64)> = traced[&id]
            .iter()
            .flatten()
            .map(|&(x, y)| lay.map_to_figure(x, y))
            .collect();
        for &p in drawn.iter().flatten() {
            assert!(
                corners
                    .iter()
                    .any(|c| (c.0 - p.0).abs() <= 0.006 && (c.1 - p.1).abs() <= 0.006),
                "drawn corner {p:?} of leaf {id} is no traced corner"
            );
        }
        // Every corner of the footprint's outer ring lies within half a figure pixel of the
        // drawn outline.
        let outer = traced[&id]
            .iter()
            .max_by(|a, b| {
                cairn::render::ring_area(a)
                    .abs()
                    .total_cmp(&cairn::render::ring_area(b).abs())
            })
            .unwrap();
        for &(x, y) in outer {
            let p = lay.map_to_figure(x, y);
            let d = drawn
                .iter()
                .flat_map(|r| (0..r.len()).map(move |i| (r[i], r[(i + 1) % r.len()])))
                .map(|(a, b)| {
                    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
                    let len2 = dx * dx + dy * dy;
                    let t = if len2 > 0.0 {
                        (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / len2).clamp(0.0, 1.0)
                    } else {
                        0.0
                    };
                    (p.0 - a.0 - t * dx).hypot(p.1 - a.1 - t * dy)
                })
                .fold(f64::INFINITY, f64::min);
            assert!(
                d <= 0.5 + 0.01,
                "corner {p:?} of leaf {id} is {d} px from its outline"
            );
        }
        drawn_corners += drawn.iter().map(|r| r.len()).sum::<usize>();
        traced_corners += corners.len();
    }
    let expected: BTreeMap<i32, i32> = traced.keys().map(|&k| (k, 1)).collect();
    assert_eq!(seen, expected, "exactly one outline path per leaf");
    assert!(
        drawn_corners * 4 < traced_corners,
        "{drawn_corners} corners drawn of {traced_corners}"
    );
}

#[test]
fn figures_of_very_tall_or_wide_maps_keep_a_bounded_size() {
    // The rule of the figure module (PANEL_MAX_HEIGHT, PANEL_MAX_ASPECT): the panel is never
    // taller than PANEL_MAX_HEIGHT times the figure's width nor more elongated than
    // PANEL_MAX_ASPECT to 1, and the map fills it; within those bounds the two axes have equal
    // scales (common practice for sky maps).
    let style = Style {
        width_px: 1600,
        ..Style::default()
    };
    let w = style.width_px as f64;
    for (nx, ny) in [
        (1, 2000),
        (2000, 1),
        (10, 300),
        (300, 10),
        (100, 250),
        (100, 201),
        (512, 384),
        (384, 700),
    ] {
        let map = smooth_map(ny, nx);
        let l = Array2::from_elem((ny, nx), -1);
        let o = plain_overlay(&map, &l, Vec::new());
        let lay = overlay_layout(&o, &style).unwrap();
        let (fx, fy, fw, fh) = lay.frame;
        let what = format!("{nx} x {ny} map");
        assert!(
            fh <= render::PANEL_MAX_HEIGHT * w,
            "{what}: panel {fw} x {fh}"
        );
        assert!(
            fh.max(fw) <= render::PANEL_MAX_ASPECT * fh.min(fw),
            "{what}: panel {fw} x {fh}"
        );
        assert!(fx + fw <= w, "{what}: panel inside the figure");
        // A panel narrower than the width allows (a tall map's) narrows the figure to it and
        // its margins: the figure is not left blank beside it. A map just over twice as tall
        // as wide, which would save a few pixels, keeps the width asked for.
        let narrow = ny as f64 > 1.1 * render::PANEL_MAX_HEIGHT * nx as f64;
        assert_eq!(
            lay.width < style.width_px,
            narrow,
            "{what}: width {}",
            lay.width
        );
        if narrow {
            assert!(
                (lay.width as f64) < fx + fw + 0.5 * w,
                "{what}: width {} beside a panel {fw} wide",
                lay.width
            );
        }
        assert!(
            (lay.height as f64) < fh + 0.5 * w,
            "{what}: figure height {} for a panel {fh} tall",
            lay.height
        );
        // The map's outer pixel edges are the frame's corners.
        let (ax, ay) = lay.map_to_figure(-0.5, -0.5);
        let (bx, by) = lay.map_to_figure(nx as f64 - 0.5, ny as f64 - 0.5);
        for (a, b) in [(ax, fx), (ay, fy + fh), (bx, fx + fw), (by, fy)] {
            assert!((a - b).abs() < 1e-9, "{what}: the map fills the frame");
        }
        let elongation = (nx as f64 / ny as f64).max(ny as f64 / nx as f64);
        if elongation <= render::PANEL_MAX_ASPECT {
            // Equal scales to the rounding of the panel's side to whole pixels.
            assert!(lay.y_stretch.is_none(), "{what}: equal scales");
            assert!(
                (lay.ky - lay.kx).abs() * nx.min(ny) as f64 <= 0.5 + 1e-9,
                "{what}: scales {} and {}",
                lay.kx,
                lay.ky
            );
        } else {
            let r = lay.y_stretch.expect("unequal scales are reported");
            assert!((r - lay.ky / lay.kx).abs() < 1e-12, "{what}");
            assert_eq!(r < 1.0, ny > nx, "{what}: stretch {r}");
        }
    }
    // The tallest case draws to the size its layout gives.
    let map = smooth_map(2000, 1);
    let l = Array2::from_elem((2000, 1), -1);
    let o = plain_overlay(&map, &l, Vec::new());
    let png = image::load_from_memory(&render_png(&o, &style).unwrap()).unwrap();
    let lay = overlay_layout(&o, &style).unwrap();
    assert_eq!((png.width(), png.height()), (lay.width, lay.height));
}

#[test]
fn the_legend_stays_inside_the_figure_at_every_accepted_width() {
    // Nothing drawn may reach the figure's left or right edge (common practice: a margin all
    // round). The legend uses the words cairn's figures of runs use, the longest it draws.
    let states: Vec<StateLegend> = cairn::draw::STATES
        .iter()
        .map(|(n, d)| StateLegend {
            name: n.to_string(),
            description: d.to_string(),
        })
        .collect();
    let map = smooth_map(48, 64);
    let l = Array2::from_elem((48, 64), -1);
    let mut o = plain_overlay(&map, &l, Vec::new());
    o.states = states.clone();
    o.unit_label = "N(H_2) [cm^-2]".into();
    let nodes = tree_nodes();
    for dpi in [300.0, 150.0] {
        let accepted = |w: u32| {
            let s = Style {
                width_px: w,
                dpi,
                ..Style::default()
            };
            overlay_layout(&o, &s).is_ok()
        };
        let smallest = (100..2000).find(|&w| accepted(w)).unwrap();
        for w in [smallest, smallest + 37, 800, 900, 1600] {
            let style = Style {
                width_px: w,
                dpi,
                ..Style::default()
            };
            let figures = [
                ("overlay", render_png(&o, &style).unwrap()),
                (
                    "tree",
                    tree_png(&nodes, &states, "level [K]", &style).unwrap(),
                ),
            ];
            for (what, png) in figures {
                let img = image::load_from_memory(&png).unwrap().to_rgb8();
                for x in [0, img.width() - 1] {
                    let touched = (0..img.height())
                        .filter(|&y| img.get_pixel(x, y).0 != [255, 255, 255])
                        .count();
                    assert_eq!(
                        touched, 0,
                        "{what} {w} px wide at {dpi} dpi: {touched} pixels drawn in column {x}"
                    );
                }
            }
        }
    }
}

/// A flat tree of `n` leaves (ids 0..n) under one root.
fn flat_tree(n: u32) -> Vec<TreeNode> {
    let mut v = vec![TreeNode {
        id: n,
        parent: None,
        top: 10.0,
        bottom: 1.0,
        is_leaf: false,
        state: None,
        show_id: true,
    }];
    v.extend((0..n).map(|id| TreeNode {
        id,
        parent: Some(n),
        top: 3.0 + (id % 7) as f64,
        bottom: 2.0,
        is_leaf: true,
        state: Some(id as usize % 3),
        show_id: true,
    }));
    v
}

/// The texts of an SVG figure (their readable words).
fn svg_texts(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.attribute("class") == Some("text") && n.attribute("fill") != Some("none"))
        .filter_map(|n| n.attribute("aria-label").map(String::from))
        .collect()
}

/// The leaf ids drawn in a tree figure (class `leaf-id`), each with the box of its glyphs.
fn tree_ids(svg: &str) -> Vec<(u32, svg_layout::Bounds)> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.attribute("class") == Some("leaf-id"))
        .map(|n| {
            let id: u32 = n.attribute("aria-label").unwrap().parse().unwrap();
            assert_eq!(n.attribute("id"), Some(format!("id-{id}").as_str()));
            (id, svg_layout::bounds(n.attribute("d").unwrap()))
        })
        .collect()
}

#[test]
fn crowded_trees_keep_their_leaf_ids_down_to_a_legible_size() {
    let style = Style {
        width_px: 1600,
        dpi: 300.0,
        ..Style::default()
    };
    // 47 leaves on 1600 pixels at 300 dpi: too crowded for upright ids of 0.75 times the
    // 9 pt text, room for turned ones of at least 5 pt (the smallest drawn).
    let nodes = flat_tree(47);
    let fig = render::render_tree_figure(&nodes, &states(), "level [K]", &style).unwrap();
    assert_eq!((fig.leaves, fig.ids_left_out), (47, 0));
    let mut drawn: Vec<u32> = tree_ids(&fig.svg).iter().map(|d| d.0).collect();
    drawn.sort_unstable();
    assert_eq!(drawn, (0..47).collect::<Vec<u32>>(), "every id is drawn");
    assert!(!svg_texts(&fig.svg).iter().any(|t| t.contains("left out")));
    // The ids' glyphs are at least MIN_ID_PT tall in capitals (digits are about as tall as
    // capitals in DejaVu Sans: 0.73 em).
    let min_px = render::MIN_ID_PT * 300.0 / 72.0;
    for (id, b) in tree_ids(&fig.svg) {
        // Turned: the digits' height runs along x.
        if id < 10 {
            let along = b.2 - b.0;
            assert!(
                along >= 0.7 * min_px,
                "id {id} {along:.1} px long at {min_px:.1} px per em"
            );
        }
    }
}

/// What a crowded tree figure must hold whatever its shape: the ids drawn and those counted
/// as left out add up to the leaves chosen for one; no two ids overlap; no id meets a line
/// (a structure's, with its casing, or a connector); the highest peak's id is drawn when it
/// is chosen (equal peaks: the lowest id); and no text in the figure speaks of ids left out.
fn check_crowded_ids(nodes: &[TreeNode], style: &Style) -> (Vec<u32>, usize) {
    let fig = render::render_tree_figure(nodes, &states(), "level [K]", style).unwrap();
    let leaf_ids: Vec<u32> = nodes
        .iter()
        .filter(|n| !nodes.iter().any(|c| c.parent == Some(n.id)))
        .filter(|n| n.show_id)
        .map(|n| n.id)
        .collect();
    let ids = tree_ids(&fig.svg);
    assert_eq!(fig.leaves, leaf_ids.len());
    assert_eq!(ids.len() + fig.ids_left_out, leaf_ids.len());
    assert!(ids.iter().all(|(id, _)| leaf_ids.contains(id)));
    for (i, a) in ids.iter().enumerate() {
        for b in &ids[i + 1..] {
            assert!(
                !svg_layout::overlap(a.1, b.1),
                "ids {} and {} overlap",
                a.0,
                b.0
            );
        }
    }
    // Lines as drawn: a structure's line is at most 0.9 pt wide over a casing 0.8 pt wider
    // (1.7 pt in all), a connector or a dense drawing's run as wide as its stroke.
    let pt = style.dpi / 72.0;
    let doc = roxmltree::Document::parse(&fig.svg).unwrap();
    for n in doc.descendants().filter(|n| n.has_tag_name("path")) {
        let (class, d) = (n.attribute("class").unwrap_or(""), n.attribute("d"));
        let stroke = n
            .attribute("stroke-width")
            .map(|w| w.parse::<f64>().unwrap());
        let half = if n.attribute("id").is_some_and(|i| i.starts_with("node-")) {
            // A line of a state is painted twice (casing and colour) from a shared path.
            stroke.map_or(0.85 * pt, |w| 0.5 * w)
        } else if class == "connector" || class.starts_with("dense") {
            0.5 * stroke.unwrap()
        } else {
            continue;
        };
        let lines = svg_layout::subpaths(d.unwrap());
        for (id, b) in &ids {
            // Only the pieces near the id are measured (the measure samples finely).
            let near: Vec<Vec<(f64, f64)>> = lines
                .iter()
                .filter(|l| {
                    let (xs, ys) = (l.iter().map(|p| p.0), l.iter().map(|p| p.1));
                    let lb = (
                        xs.clone().fold(f64::INFINITY, f64::min) - half - 1.0,
                        ys.clone().fold(f64::INFINITY, f64::min) - half - 1.0,
                        xs.fold(f64::NEG_INFINITY, f64::max) + half + 1.0,
                        ys.fold(f64::NEG_INFINITY, f64::max) + half + 1.0,
                    );
                    svg_layout::overlap(lb, *b)
                })
                .cloned()
                .collect();
            let dist = svg_layout::distance(&near, *b);
            assert!(
                dist >= half,
                "id {id} lies {dist:.2} px from the middle of a line ({class}) {half:.2} px half wide"
            );
        }
    }
    let highest = nodes
        .iter()
        .filter(|n| !nodes.iter().any(|c| c.parent == Some(n.id)))
        .min_by(|a, b| b.top.total_cmp(&a.top).then(a.id.cmp(&b.id)))
        .unwrap();
    assert_eq!(
        ids.iter().any(|d| d.0 == highest.id),
        highest.show_id,
        "the highest peak is named when chosen"
    );
    assert!(!svg_texts(&fig.svg).iter().any(|t| t.contains("left out")));
    let png = render::render_tree_figure(nodes, &states(), "level [K]", style)
        .unwrap()
        .png;
    assert_eq!(png, fig.png, "drawn identically again");
    (ids.into_iter().map(|d| d.0).collect(), fig.ids_left_out)
}

/// A tree too crowded for every id even at MIN_ID_PT names the leaves it has room for,
/// highest peak first, and counts the others for the caller to say.
#[test]
fn crowded_trees_name_the_highest_peaks_they_have_room_for() {
    let style = Style {
        width_px: 1600,
        dpi: 300.0,
        ..Style::default()
    };
    // 400 leaves under one root on about 3.6 pixels each, peaks 3 to 9 in turn: the leaves of
    // the highest peak (id % 7 == 6) stand seven leaves (about 25 pixels) apart, room for
    // turned ids of 5 pt (21 pixels per em) between them, so each is named; the leaves beside
    // them are lower and lie within an id's width of a higher line, so they are not.
    let nodes = flat_tree(400);
    let (drawn, left_out) = check_crowded_ids(&nodes, &style);
    for id in (6..400).step_by(7) {
        assert!(drawn.contains(&id), "id {id} of a highest peak is drawn");
    }
    assert!(left_out > 0);
    // Random binary trees, a few hundred leaves on the same width.
    for seed in 1..6 {
        check_crowded_ids(&random_tree(300, seed), &style);
    }
    // Only the leaves chosen for an id are named, and only they are counted.
    let mut some = random_tree(300, 7);
    for n in &mut some {
        n.show_id = n.id % 3 == 0;
    }
    check_crowded_ids(&some, &style);
    // A narrow figure at a low resolution, and a tree with more leaves than pixel columns.
    let narrow = Style {
        width_px: 400,
        dpi: 100.0,
        ..Style::default()
    };
    check_crowded_ids(&random_tree(200, 8), &narrow);
    let (drawn, left_out) = check_crowded_ids(&random_tree(5000, 9), &tree_style());
    assert!(!drawn.is_empty() && left_out > 4000);
}

/// A figure too narrow for the map beside its labels is refused with the narrowest width
/// that works: that width is laid out, and one pixel less is refused with the same number.
#[test]
fn a_figure_too_narrow_is_refused_with_the_narrowest_width_that_works() {
    let l = tricky_labels();
    let map = smooth_map(6, 10);
    let o = plain_overlay(&map, &l, leaves_of(&l));
    for dpi in [72.0, 300.0] {
        let style = |width_px: u32| Style {
            width_px,
            dpi,
            ..Style::default()
        };
        let needed = match overlay_layout(&o, &style(render::narrowest_width_px(dpi) - 1)) {
            Err(render::RenderError::TooNarrow { needed, .. }) => needed,
            other => panic!("{dpi} dpi: {:?}", other.map(|l| l.width)),
        };
        assert!(
            overlay_layout(&o, &style(needed)).is_ok(),
            "{dpi} dpi: {needed}"
        );
        match overlay_layout(&o, &style(needed - 1)) {
            Err(e @ render::RenderError::TooNarrow { .. }) => {
                assert!(
                    e.to_string().contains(&format!("at least {needed} pixels")),
                    "{e}"
                )
            }
            other => panic!("{dpi} dpi: {:?}", other.map(|l| l.width)),
        }
    }
}

/// On a wide map's flat panel (2000 x 100 pixels: 16 times wider than tall at 1600 pixels and
/// 300 dpi, about 90 pixels tall) the scale bar's text has no room over the bar and stands
/// beside it: bar and text both inside the frame, apart; so too at 1200 pixels (a panel about
/// 70 pixels tall), and at 900 pixels, where the panel would be shorter than the text (29
/// pixels against 32) and is made tall enough for it. At the narrowest width this map's
/// layout accepts (a panel an inch wide) the frame is too narrow for a bar of three quarters
/// of the map beside its text: both are left out, and said to be. Common practice (a layout
/// check of this project).
#[test]
fn a_flat_panel_keeps_the_scale_bar_text_inside_the_frame() {
    let l = Array2::from_elem((100, 2000), -1);
    let map = smooth_map(100, 2000);
    let mut o = plain_overlay(&map, &l, Vec::new());
    o.scale_bar = Some((300.0, "2 pc".into()));
    // The narrowest width this map's layout accepts.
    let narrowest = match overlay_layout(
        &o,
        &Style {
            width_px: render::narrowest_width_px(Style::default().dpi),
            ..Style::default()
        },
    ) {
        Err(render::RenderError::TooNarrow { needed, .. }) => needed,
        other => panic!("{:?}", other.map(|l| l.width)),
    };
    for width in [1600, 1200, 900] {
        let style = Style {
            width_px: width,
            ..Style::default()
        };
        let svg = render_svg(&o, &style).unwrap();
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let d_of = |pred: &dyn Fn(roxmltree::Node) -> bool| {
            doc.descendants()
                .find(|n| n.tag_name().name() == "path" && pred(*n))
                .and_then(|n| n.attribute("d"))
                .unwrap()
                .to_string()
        };
        let frame = svg_layout::bounds(&d_of(&|n| n.attribute("class") == Some("frame")));
        let bar = svg_layout::bounds(&d_of(&|n| n.attribute("class") == Some("scale-bar")));
        let text = svg_layout::bounds(&d_of(&|n| n.attribute("aria-label") == Some("2 pc")));
        let within = |b: svg_layout::Bounds| {
            b.0 >= frame.0 && b.1 >= frame.1 && b.2 <= frame.2 && b.3 <= frame.3
        };
        assert!(frame.3 - frame.1 < 100.0, "{width}: a flat panel {frame:?}");
        assert!(within(bar), "{width}: bar {bar:?} outside {frame:?}");
        assert!(within(text), "{width}: text {text:?} outside {frame:?}");
        assert!(
            !svg_layout::overlap(bar, text),
            "{width}: text {text:?} over the bar {bar:?}"
        );
    }
    o.scale_bar = Some((1500.0, "10 pc".into()));
    let fig = render::render_map_figure(
        &o,
        &Style {
            width_px: narrowest,
            ..Style::default()
        },
    )
    .unwrap();
    assert!(
        fig.scale_bar_left_out,
        "{narrowest}: the bar said to be left out"
    );
    assert!(
        !fig.svg.contains("scale-bar") && !fig.svg.contains("aria-label=\"10 pc\""),
        "{narrowest}: no bar drawn"
    );
    let fig = render::render_map_figure(&o, &Style::default()).unwrap();
    assert!(!fig.scale_bar_left_out && fig.svg.contains("scale-bar"));
}

/// The largest difference over the three colour channels of each pixel of two RGB images of
/// the same size.
fn channel_differences(a: &image::RgbImage, b: &image::RgbImage) -> Vec<u8> {
    assert_eq!(
        a.dimensions(),
        b.dimensions(),
        "the two images have one size"
    );
    a.pixels()
        .zip(b.pixels())
        .map(|(p, q)| (0..3).map(|c| p[c].abs_diff(q[c])).max().unwrap_or(0))
        .collect()
}

#[test]
fn pdf_check_figure_is_what_cairn_makes_now() {
    // The oracle rendered the stored PDF; it must still be cairn's output, byte for byte.
    let (png, pdf) = render::pdf_check_figure().unwrap();
    for (name, fresh) in [("check.png", &png), ("check.pdf", &pdf)] {
        let stored = std::fs::read(common::fixture_path(&format!("render/{name}"))).unwrap();
        assert!(
            *fresh == stored,
            "{name} differs from fixtures/render/{name}: run `cargo run --example make_render_fixture` and tests/oracle/render_pdf_pdfium.py"
        );
    }
}

#[test]
fn pdf_drawn_by_pdfium_matches_the_png_of_the_same_figure() {
    // pypdfium2 5.15.2 (PDFium) rendered cairn's PDF of its check figure at the figure's
    // resolution (tests/oracle/render_pdf_pdfium.py); cairn's PNG of the same scene is drawn
    // by tiny-skia. The two renderers smooth edges in their own ways, so pixels along edges
    // differ by some levels; a wrong transformation, a flipped image, a lost clip, a missing
    // translucency, dash or halo would differ over whole areas.
    let meta = common::fixture_json("render/check-pdfium.json");
    let pdfium = image::open(common::fixture_path("render/check-pdfium.png"))
        .unwrap()
        .to_rgb8();
    let ours = image::open(common::fixture_path("render/check.png"))
        .unwrap()
        .to_rgb8();
    // One page of the print size: 240 x 180 figure pixels at 144 dpi are 120 x 90 points
    // (72 points to the inch, ISO 32000-1 sec. 8.3.2.3).
    assert_eq!(meta["pages"], 1);
    assert_eq!(meta["width_pt"].as_f64(), Some(240.0 / 144.0 * 72.0));
    assert_eq!(meta["height_pt"].as_f64(), Some(180.0 / 144.0 * 72.0));
    let d = channel_differences(&pdfium, &ours);
    let mean = d.iter().map(|&v| v as f64).sum::<f64>() / d.len() as f64;
    let over = |t: u8| d.iter().filter(|&&v| v > t).count() as f64 / d.len() as f64;
    assert!(mean < 2.0, "mean difference {mean} levels");
    assert!(
        over(32) < 0.01,
        "{} of the pixels differ by more than 32",
        over(32)
    );
    assert_eq!(over(96), 0.0, "no pixel differs by more than 96 levels");
    // The comparison tells a wrong figure apart: the same PNG upside down differs widely.
    let flipped = image::imageops::flip_vertical(&ours);
    let df = channel_differences(&pdfium, &flipped);
    let mean_flipped = df.iter().map(|&v| v as f64).sum::<f64>() / df.len() as f64;
    assert!(mean_flipped > 10.0 * mean.max(1.0), "{mean_flipped}");
}

/// The numbers of a PDF's `/MediaBox [0 0 w h]`.
fn media_box(pdf: &[u8]) -> (f64, f64) {
    let text = String::from_utf8_lossy(pdf);
    let at = text.find("/MediaBox [").expect("a MediaBox") + "/MediaBox [".len();
    let end = at + text[at..].find(']').unwrap();
    let v: Vec<f64> = text[at..end]
        .split_whitespace()
        .map(|t| t.parse().unwrap())
        .collect();
    assert_eq!((v[0], v[1]), (0.0, 0.0));
    (v[2], v[3])
}

#[test]
fn map_and_tree_pdfs_are_one_page_of_the_print_size_and_repeat() {
    let l = tricky_labels();
    let map = smooth_map(6, 10);
    let o = plain_overlay(&map, &l, leaves_of(&l));
    let style = Style {
        width_px: 700,
        dpi: 100.0,
        ..Style::default()
    };
    let fig = render::render_map_figure(&o, &style).unwrap();
    let lay = overlay_layout(&o, &style).unwrap();
    assert!(fig.pdf.starts_with(b"%PDF-1.7"));
    let (w, h) = media_box(&fig.pdf);
    // Points are 1/72 inch; the figure is width/dpi inches wide (f32 in the file).
    assert!((w - 700.0 / 100.0 * 72.0).abs() < 1e-3, "{w}");
    assert!((h - lay.height as f64 / 100.0 * 72.0).abs() < 1e-3, "{h}");
    assert_eq!(fig.pdf, render::render_map_figure(&o, &style).unwrap().pdf);
    let node = |id, parent, top, bottom, is_leaf| TreeNode {
        id,
        parent,
        top,
        bottom,
        is_leaf,
        state: None,
        show_id: true,
    };
    let nodes = vec![
        node(0, None, 5.0, 1.0, false),
        node(1, Some(0), 4.0, 2.0, true),
        node(2, Some(0), 4.5, 2.0, true),
    ];
    let t = render::render_tree_figure(&nodes, &states(), "level", &style).unwrap();
    let (tw, _) = media_box(&t.pdf);
    assert!((tw - 700.0 / 100.0 * 72.0).abs() < 1e-3, "{tw}");
    assert_eq!(
        t.pdf,
        render::render_tree_figure(&nodes, &states(), "level", &style)
            .unwrap()
            .pdf
    );
}

#[test]
fn a_beam_smaller_than_a_few_outline_widths_is_filled_at_its_exact_size() {
    // A beam drawn as a white ellipse with a 0.8 pt outline centred on its edge is outline
    // only, and larger than the beam, when it is a few outline widths across: below four of
    // them it is filled black instead (over a thin white rim drawn beneath it).
    let map = smooth_map(200, 200);
    let l = Array2::from_elem((200, 200), -1);
    for (dpi, filled) in [(100.0, false), (600.0, true)] {
        let mut o = plain_overlay(&map, &l, Vec::new());
        o.beam = Some((3.0, 3.0, 0.0));
        let style = Style {
            width_px: 1600,
            dpi,
            ..Style::default()
        };
        let fig = render::render_map_figure(&o, &style).unwrap();
        let side = fig.beam_px.expect("the beam is drawn");
        assert_eq!(
            side < 4.0 * 0.8 * dpi / 72.0,
            filled,
            "{side} px at {dpi} dpi"
        );
        let doc = roxmltree::Document::parse(&fig.svg).unwrap();
        let beam = doc
            .descendants()
            .find(|n| n.attribute("class") == Some("beam"))
            .expect("a beam path");
        let id = beam
            .attribute("id")
            .expect("the beam's geometry is painted twice");
        let paints: Vec<(Option<&str>, Option<&str>)> = doc
            .descendants()
            .filter(|n| n.has_tag_name("use") && n.attribute("href") == Some(&format!("#{id}")))
            .map(|n| (n.attribute("fill"), n.attribute("stroke")))
            .collect();
        let expected = if filled {
            vec![
                (Some("none"), Some("#FFFFFF")),
                (Some("#000000"), Some("none")),
            ]
        } else {
            vec![
                (Some("#FFFFFF"), Some("none")),
                (Some("none"), Some("#000000")),
            ]
        };
        assert_eq!(paints, expected, "{dpi} dpi");
    }
}

/// The map images the SVG embeds (the first `<image>` is the map's, the colour bar's after
/// it): each image's PNG bytes decoded.
fn svg_images(svg: &str) -> Vec<image::RgbImage> {
    use base64::Engine;
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| n.has_tag_name("image"))
        .map(|n| {
            let href = n
                .attributes()
                .find(|a| a.name() == "href")
                .map(|a| a.value())
                .unwrap();
            let b64 = href.strip_prefix("data:image/png;base64,").unwrap();
            let png = base64::engine::general_purpose::STANDARD
                .decode(b64)
                .unwrap();
            image::load_from_memory(&png).unwrap().to_rgb8()
        })
        .collect()
}

#[test]
fn vector_figures_hold_the_maps_own_pixels_where_each_is_at_least_a_figure_pixel() {
    // A 40 x 30 map in a panel hundreds of figure pixels wide: the SVG (and the PDF, from the
    // same scene) embeds the map's 40 x 30 pixels, stretched over the panel without smoothing,
    // and each agrees with the PNG's figure pixel at its centre. A map larger than its panel
    // is embedded at the panel's resolution, area-averaged as in the PNG.
    let l = Array2::from_elem((30, 40), -1);
    let map = smooth_map(30, 40);
    let o = plain_overlay(&map, &l, Vec::new());
    let style = Style {
        width_px: 700,
        dpi: 100.0,
        ..Style::default()
    };
    let fig = render::render_map_figure(&o, &style).unwrap();
    let lay = overlay_layout(&o, &style).unwrap();
    let own = &svg_images(&fig.svg)[0];
    assert_eq!(own.dimensions(), (40, 30));
    let pdf = String::from_utf8_lossy(&fig.pdf);
    assert!(
        pdf.contains("/Width 40") && pdf.contains("/Height 30"),
        "the PDF's map image"
    );
    let png = image::load_from_memory(&fig.png).unwrap().to_rgb8();
    let (fx, fy, fw, fh) = lay.frame;
    for j in 0..30u32 {
        for i in 0..40u32 {
            // Image row j is map row 29 - j (north up); its centre on the figure.
            let cx = fx + (i as f64 + 0.5) * fw / 40.0;
            let cy = fy + (j as f64 + 0.5) * fh / 30.0;
            assert_eq!(
                own.get_pixel(i, j),
                png.get_pixel(cx as u32, cy as u32),
                "map pixel ({i}, {j})"
            );
        }
    }
    // A map of more pixels than its panel: the panel's resolution.
    let big = smooth_map(900, 1200);
    let lb = Array2::from_elem((900, 1200), -1);
    let o = plain_overlay(&big, &lb, Vec::new());
    let fig = render::render_map_figure(&o, &style).unwrap();
    let lay = overlay_layout(&o, &style).unwrap();
    let img = &svg_images(&fig.svg)[0];
    assert_eq!(
        (img.width() as f64, img.height() as f64),
        (lay.frame.2, lay.frame.3)
    );
}

/// The line styles of a tree's leaves stay apart at the narrowest widths and at a journal's
/// column width (3.5 in at 300 dpi): each patterned line (and each legend sample) begins and
/// ends with a dash, and its gaps stay open once the dark casing's round caps reach into them,
/// by at least half the casing's width and 0.75 pixel (common practice: a gap narrower than
/// that closes in print or on screen, and the styles look alike).
#[test]
fn tree_line_styles_keep_open_gaps_at_narrow_widths() {
    let five: Vec<StateLegend> = ["solid", "dashed", "dotted", "dash-dot", "long-dash"]
        .iter()
        .map(|n| StateLegend {
            name: n.to_string(),
            description: String::new(),
        })
        .collect();
    let mut nodes = random_tree(40, 4);
    for n in &mut nodes {
        n.state = n.is_leaf.then_some(n.id as usize % 5);
    }
    let (fit, dpi72) = (render::narrowest_width_px(300.0), 200);
    for (width, dpi) in [(fit, 300.0), (1050, 300.0), (dpi72, 72.0), (1600, 300.0)] {
        let style = Style {
            width_px: width,
            dpi,
            ..Style::default()
        };
        let svg = tree_svg(&nodes, &five, "level [K]", &style).unwrap();
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let (mut by_style, mut samples) = ([0usize; 5], 0);
        for def in doc.descendants().filter(|n| {
            n.has_tag_name("path") && n.parent().is_some_and(|p| p.has_tag_name("defs"))
        }) {
            let Some(id) = def.attribute("id") else {
                continue;
            };
            let class = def.attribute("class").unwrap_or("");
            // A structure's line (its state in its class), or a legend sample.
            let st: Option<usize> = class
                .split(' ')
                .find_map(|c| c.strip_prefix("state-"))
                .map(|s| s.parse().unwrap());
            if st.is_none() && class != "legend-sample" {
                continue;
            }
            // The first painting is the casing, the wider.
            let casing = doc
                .descendants()
                .find(|u| {
                    u.has_tag_name("use") && u.attribute("href") == Some(format!("#{id}").as_str())
                })
                .unwrap();
            let cw: f64 = casing.attribute("stroke-width").unwrap().parse().unwrap();
            let pts = svg_layout::subpaths(def.attribute("d").unwrap());
            let (a, b) = (pts[0][0], *pts[0].last().unwrap());
            let len = (b.0 - a.0).hypot(b.1 - a.1);
            let Some(dash) = casing.attribute("stroke-dasharray") else {
                assert!(
                    matches!(st, Some(0) | None),
                    "{width} px: only the solid style has no dashes"
                );
                continue;
            };
            let p: Vec<f64> = dash.split(' ').map(|v| v.parse().unwrap()).collect();
            match st {
                Some(st) => by_style[st] += 1,
                None => samples += 1,
            }
            // Long enough for three dashes of the pattern (a shorter line shows what fits):
            // the gaps as seen stay open.
            if len >= p[0] + p[1] + p[2 % p.len()] + p[3 % p.len()] + p[0] {
                for g in p.iter().skip(1).step_by(2) {
                    let seen = g - cw;
                    assert!(
                        seen >= (0.5 * cw).max(0.75) - 0.02,
                        "{width} px at {dpi} dpi, {id} ({class}): a gap of {seen:.2} px seen on a line {cw} px wide ({dash} along {len:.2})"
                    );
                }
            }
            // Dashes laid from the line's first end: one ends at its other end (the SVG writes
            // two decimals, so each number may be off by 0.005, and the errors add up).
            let mut at = 0.0;
            let mut k = 0;
            let mut ends_on_a_dash = false;
            let tol = |k: usize| 0.01 * (k + 1) as f64 + 0.01;
            while at <= len + tol(k) {
                let end = at + p[(2 * k) % p.len()];
                ends_on_a_dash |= (end - len).abs() <= tol(k);
                at = end + p[(2 * k + 1) % p.len()];
                k += 1;
            }
            assert!(
                ends_on_a_dash,
                "{width} px at {dpi} dpi, {id}: {dash} on a line {len:.2} long"
            );
        }
        // Every patterned style is drawn, in the diagram and in its legend.
        assert!(
            by_style[1..].iter().all(|&c| c >= 2),
            "{width}: {by_style:?}"
        );
        assert_eq!(samples, 4, "{width}");
    }
}

/// The beam stands in the lower left corner unless a leaf's outline runs there; then it takes
/// the next corner clear of outlines (the upper left here), as the scale bar does. Read from
/// the SVG: the beam's box against the leaf outline's, and the frame's halves.
#[test]
fn the_beam_leaves_a_corner_where_a_leaf_outline_runs() {
    let map = smooth_map(200, 200);
    let style = Style {
        width_px: 1200,
        ..Style::default()
    };
    let beam_box = |labels: &Array2<i32>| {
        let mut o = plain_overlay(&map, labels, leaves_of(labels));
        o.beam = Some((10.0, 10.0, 0.0));
        let fig = render::render_map_figure(&o, &style).unwrap();
        let doc = roxmltree::Document::parse(&fig.svg).unwrap();
        let d_of = |class: &str| {
            doc.descendants()
                .find(|n| {
                    n.attribute("class")
                        .is_some_and(|c| c.split(' ').next() == Some(class))
                })
                .and_then(|n| n.attribute("d"))
                .map(svg_layout::bounds)
        };
        (d_of("beam").expect("a beam"), d_of("leaf"), fig)
    };
    // No leaf: the lower left (SVG y grows downwards).
    let empty = Array2::from_elem((200, 200), -1);
    let (b0, _, _) = beam_box(&empty);
    // A small leaf around where that beam stood (map rows count from the bottom).
    let mut l = Array2::from_elem((200, 200), -1);
    for y in 2..12 {
        for x in 2..12 {
            l[[y, x]] = 0;
        }
    }
    let (b1, leaf, _) = beam_box(&l);
    let leaf = leaf.expect("the leaf is outlined");
    let meets = |a: svg_layout::Bounds, b: svg_layout::Bounds| {
        a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3
    };
    assert!(
        meets(b0, leaf),
        "the leaf lies where the beam stood: {b0:?} {leaf:?}"
    );
    assert!(!meets(b1, leaf), "beam {b1:?} on the leaf {leaf:?}");
    // Same left edge, now in the upper half.
    assert!((b1.0 - b0.0).abs() < 1.0 && b1.3 < b0.1, "{b0:?} -> {b1:?}");
}

//! Figures: ticks against astropy, beam and scale bar against the header, SVG and PNG
//! structure, and redrawing a finished run.

mod common;

use std::path::PathBuf;

use cairn::header::Header;
use cairn::render::axes::{Coord, Edge};
use common::{fixture_json, fixture_path, nums};

#[test]
fn ticks_sit_where_astropy_puts_their_values() {
    // astropy 8.0.2 WCS.all_pix2world sampled every 0.25 px along each frame edge
    // (fixtures/draw/ticks.json, tests/oracle/draw_ticks_astropy.py).
    let v = fixture_json("draw/ticks.json");
    for (name, m) in v["maps"].as_object().unwrap() {
        let cards: Vec<String> = m["cards"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| format!("{:<80}", c.as_str().unwrap()))
            .collect();
        let wcs = cairn::wcs::Wcs::from_header(&Header::parse(&cards.concat()))
            .unwrap()
            .unwrap();
        let (nx, ny) = (
            m["nx"].as_u64().unwrap() as usize,
            m["ny"].as_u64().unwrap() as usize,
        );
        let ticks = cairn::render::axis_ticks(Some(&wcs), (0, 0, nx, ny), 8, 8);
        let sky_ticks: Vec<_> = ticks
            .ticks
            .iter()
            .filter(|t| matches!(t.coord, Coord::Lon | Coord::Lat))
            .collect();
        assert!(sky_ticks.len() >= 4, "{name}: ticks on the frame");
        for t in sky_ticks {
            let (edge, along) = match t.edge {
                Edge::Bottom => ("bottom", t.x),
                Edge::Top => ("top", t.x),
                Edge::Left => ("left", t.y),
                Edge::Right => ("right", t.y),
            };
            let e = &m["edges"][edge];
            let pos = nums(&e["pos"]);
            let coord = nums(
                &e[if matches!(t.coord, Coord::Lon) {
                    "lon"
                } else {
                    "lat"
                }],
            );
            // Where astropy's coordinate crosses the tick's value along this edge.
            let diff = |c: f64| {
                let d = c - t.value;
                if matches!(t.coord, Coord::Lon) {
                    (d + 540.0).rem_euclid(360.0) - 180.0
                } else {
                    d
                }
            };
            let mut best = f64::INFINITY;
            for k in 1..pos.len() {
                let (a, b) = (diff(coord[k - 1]), diff(coord[k]));
                if a == 0.0 || a.signum() != b.signum() {
                    let p = pos[k - 1] + (pos[k] - pos[k - 1]) * a / (a - b);
                    best = best.min((p - along).abs());
                }
            }
            assert!(
                best <= 0.5,
                "{name}: tick {} ({:?} on {edge}) at {along:.3} px is {best:.3} px from astropy's crossing",
                t.label,
                t.coord
            );
        }
    }
}

fn fixture_map() -> cairn::map::Map {
    cairn::map::load(&fixture_path("segment/map.fits"), &Default::default()).unwrap()
}

#[test]
fn beam_and_scale_bar_follow_the_header() {
    let m = fixture_map();
    let h = &m.header;
    // Header values written by cairn synth: BMAJ, BMIN in degrees; CDELT in degrees per pixel.
    let (bmaj, bmin, cdelt) = (
        h.get_f64("BMAJ").unwrap(),
        h.get_f64("BMIN").unwrap(),
        h.get_f64("CDELT2").unwrap().abs(),
    );
    let (a, b, _) = cairn::draw::beam_px(&m, None).unwrap();
    assert!(
        (a - bmaj / cdelt).abs() < 1e-6 && (b - bmin / cdelt).abs() < 1e-6,
        "beam {a} x {b} px"
    );
    let d = 310.0;
    let (len_px, text) = cairn::draw::scale_bar(&m, Some(d), None).unwrap();
    let len_pc: f64 = text.trim_end_matches(" pc").parse().unwrap();
    // Small-angle length of len_pc at d, in pixels of CDELT degrees (common practice).
    let expected = (len_pc / d).to_degrees() / cdelt;
    assert!(
        (len_px - expected).abs() <= 0.5,
        "scale bar {len_px} px, expected {expected}"
    );
}

#[test]
fn segment_figures_are_well_formed_and_redrawn_identically() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let mut o = {
        #[allow(dead_code)]
        #[path = "common/segment_fixture.rs"]
        mod fx;
        fx::fixture_options(&out)
    };
    o.figure = Some(cairn::render::Style {
        width_px: 900,
        ..Default::default()
    });
    let m = fixture_map();
    cairn::segment::run(&m, &o, &|_, _| {}).unwrap();
    let csv = std::fs::read_to_string(out.join("structures.csv")).unwrap();
    let n_leaves = csv
        .lines()
        .filter(|l| !l.starts_with('#'))
        .filter(|l| l.split(',').nth(1) == Some("leaf"))
        .count();
    let svg = std::fs::read_to_string(out.join("overlay.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).expect("well-formed XML");
    let leaf_paths = doc
        .descendants()
        .filter(|n| {
            n.tag_name().name() == "path"
                && n.attribute("id").is_some_and(|i| i.starts_with("leaf-"))
        })
        .count();
    assert_eq!(leaf_paths, n_leaves, "one outline path per leaf");
    let png = image::load_from_memory(&std::fs::read(out.join("overlay.png")).unwrap()).unwrap();
    assert_eq!(png.width(), 900);
    roxmltree::Document::parse(&std::fs::read_to_string(out.join("tree.svg")).unwrap())
        .expect("tree SVG is XML");
    // `cairn draw` on the finished run makes the same bytes with the same style.
    let redraw = dir.path().join("redraw");
    let status = std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args([
            "draw",
            out.to_str().unwrap(),
            "-o",
            redraw.to_str().unwrap(),
            "--width",
            "900",
            "-q",
        ])
        .status()
        .unwrap();
    assert!(status.success());
    for f in ["overlay.png", "overlay.svg", "tree.png", "tree.svg"] {
        assert!(
            std::fs::read(out.join(f)).unwrap() == std::fs::read(redraw.join(f)).unwrap(),
            "{f} redrawn identically"
        );
    }
    // A figure too small for every label says how many leaves went unlabelled, and that
    // count and the labels drawn add up to the leaves.
    let small = dir.path().join("small");
    let o3 = std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(["draw", out.to_str().unwrap(), "-o", small.to_str().unwrap()])
        .args(["--width", "320", "--dpi", "120", "-q"])
        .output()
        .unwrap();
    assert!(o3.status.success());
    let text = String::from_utf8_lossy(&o3.stdout).to_string();
    let line = text
        .lines()
        .find(|l| l.contains("left without a label"))
        .unwrap_or_else(|| panic!("no note of unlabelled leaves in {text:?}"));
    let words: Vec<&str> = line.split_whitespace().collect();
    let left_out: usize = words[1].parse().unwrap();
    let in_frame: usize = words[3].parse().unwrap();
    assert_eq!(in_frame, n_leaves);
    let svg = std::fs::read_to_string(small.join("overlay.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let shown = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("leaf-label"))
        .count();
    assert!(left_out > 0 && shown > 0, "{line}");
    assert_eq!(shown + left_out, n_leaves, "{line}");
    // A different map under the recorded name is refused.
    let other = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let out2 = std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args([
            "draw",
            out.to_str().unwrap(),
            "--map",
            other.to_str().unwrap(),
            "-o",
            dir.path().join("x").to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert_eq!(out2.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out2.stderr).contains("SHA-256 differs"));
}

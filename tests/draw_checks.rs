//! Figures: ticks against astropy, beam and scale bar against the header, SVG and PNG
//! structure, and redrawing a finished run.

mod common;
#[allow(dead_code)]
#[path = "common/segment_fixture.rs"]
mod segment_fixture;

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
    let (a, b) = cairn::draw::beam_px(&m, None).unwrap().half_extent();
    // BPA 0: the major axis along y, the minor along x.
    let (b, a) = (2.0 * a, 2.0 * b);
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
    let mut o = segment_fixture::fixture_options(&out);
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
    // Without --title, the document's own title names the map's file (common practice: a
    // figure's file says what it shows to a viewer's window and a document index).
    let file = m.path.file_name().unwrap().to_string_lossy().to_string();
    let title = doc
        .descendants()
        .find(|n| n.tag_name().name() == "title")
        .and_then(|n| n.text())
        .unwrap();
    assert_eq!(title, format!("{file}: leaves outlined"));
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
    for f in [
        "overlay.png",
        "overlay.svg",
        "overlay.pdf",
        "tree.png",
        "tree.svg",
        "tree.pdf",
    ] {
        assert!(
            std::fs::read(out.join(f)).unwrap() == std::fs::read(redraw.join(f)).unwrap(),
            "{f} redrawn identically"
        );
    }
    // A figure at the narrowest width draw accepts (which a narrower one's refusal names),
    // too small for every label, says how many leaves went unlabelled, and that count and the
    // labels drawn add up to the leaves.
    let small = dir.path().join("small");
    let draw_at = |width: &str| {
        std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args(["draw", out.to_str().unwrap(), "-o", small.to_str().unwrap()])
            .args(["--width", width, "--dpi", "120", "-q"])
            .output()
            .unwrap()
    };
    let refused = draw_at("200");
    assert!(!refused.status.success());
    let said = String::from_utf8_lossy(&refused.stderr).to_string();
    let narrowest = said
        .split("at least ")
        .nth(1)
        .and_then(|r| r.split(' ').next())
        .unwrap_or_else(|| panic!("no narrowest width in {said:?}"))
        .to_string();
    let o3 = draw_at(&narrowest);
    assert!(
        o3.status.success(),
        "{}",
        String::from_utf8_lossy(&o3.stderr)
    );
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

/// An invented map of 4" x 8" pixels (the reviewer's `nonsq` map: 240 x 120 pixels, TAN at
/// RA 201.2, Dec 33.4, an 18" beam), written to `dir`.
fn non_square_map(dir: &std::path::Path) -> cairn::map::Map {
    use cairn::header::Value;
    let mut h = Header::new();
    let mut set = |k: &str, v: Value| h.set(k, v, "");
    set("CTYPE1", Value::Str("RA---TAN".into()));
    set("CTYPE2", Value::Str("DEC--TAN".into()));
    set("CRPIX1", Value::Float(120.5));
    set("CRPIX2", Value::Float(60.5));
    set("CRVAL1", Value::Float(201.2));
    set("CRVAL2", Value::Float(33.4));
    set("CDELT1", Value::Float(-4.0 / 3600.0));
    set("CDELT2", Value::Float(8.0 / 3600.0));
    set("RADESYS", Value::Str("ICRS".into()));
    set("BUNIT", Value::Str("cm-2".into()));
    set("BMAJ", Value::Float(18.0 / 3600.0));
    set("BMIN", Value::Float(18.0 / 3600.0));
    set("BPA", Value::Float(0.0));
    let data = ndarray::Array2::from_shape_fn((120, 240), |(y, x)| {
        (1e21 * (1.0 + ((x as f64 - 100.0).powi(2) + (y as f64 - 50.0).powi(2)) / -400.0).exp())
            as f32
    });
    let p = dir.join("nonsq.fits");
    cairn::fits_write::write_image_f32(&p, data.view(), &h, false).unwrap();
    cairn::map::load(&p, &Default::default()).unwrap()
}

/// The points of the first sub-path of an SVG path's data.
fn svg_points(d: &str) -> Vec<(f64, f64)> {
    let n: Vec<f64> = d
        .split(|c: char| c.is_ascii_alphabetic() || c == ' ' || c == ',')
        .filter(|s| !s.is_empty())
        .map(|s| s.parse().unwrap())
        .collect();
    n.chunks_exact(2).map(|p| (p[0], p[1])).collect()
}

/// On pixels of 4" x 8" the beam is the 18" beam's ellipse on the pixel grid, the scale bar
/// is measured along x, and the panel is drawn at equal scales on the sky. Reference numbers:
/// astropy 8.0.2 `wcs.utils.proj_plane_pixel_scales` on this header gives 4" and 8" (so the
/// beam is 18/4 = 4.5 pixels wide and 18/8 = 2.25 tall), and astropy units give
/// (0.2 pc / 300 pc) rad = 137.50987" (34.377 pixels of 4").
#[test]
fn non_square_pixels_give_the_beam_scale_bar_and_panel_their_sky_sizes() {
    let dir = tempfile::tempdir().unwrap();
    let m = non_square_map(dir.path());
    let (hx, hy) = cairn::draw::beam_px(&m, None).unwrap().half_extent();
    assert!(
        (2.0 * hx - 4.5).abs() < 1e-3 && (2.0 * hy - 2.25).abs() < 1e-3,
        "beam {} x {} px",
        2.0 * hx,
        2.0 * hy
    );
    // An 8' region is 480"/4" = 120 pixels wide and 480"/8" = 60 tall, and lies inside.
    let ((_, _, w, h), note) = cairn::draw::parse_region("201.2,33.4,8arcmin", &m).unwrap();
    assert_eq!((w, h, note), (120, 60, None));
    let (len_px, text) = cairn::draw::scale_bar(&m, Some(300.0), None).unwrap();
    assert_eq!(text, "0.2 pc");
    assert!(
        (len_px - 137.50987 / 4.0).abs() < 1e-3,
        "scale bar {len_px} px"
    );
    // The figure: the map is 960" x 960" on the sky, so its panel is square, and drawn at
    // equal scales on the sky the round beam is round again: 4.5 / 240 of the panel's width
    // and 2.25 / 120 of its height. The bar is 34.377 / 240 of the panel's width.
    let labels = ndarray::Array2::from_elem(m.data.dim(), -1i32);
    let input = cairn::draw::FigureInput {
        map: &m,
        labels: labels.view(),
        structures: Vec::new(),
        distance_pc: Some(300.0),
        title: None,
        label_choice: Default::default(),
    };
    let style = cairn::render::Style {
        width_px: 1200,
        ..Default::default()
    };
    let figs = cairn::draw::figures(&input, &style).unwrap();
    assert_eq!(figs.overlay.y_stretch, None);
    let doc = roxmltree::Document::parse(&figs.overlay.svg).unwrap();
    let path = |class: &str| {
        let n = doc
            .descendants()
            .find(|n| n.attribute("class") == Some(class))
            .unwrap_or_else(|| panic!("no {class} drawn"));
        svg_points(n.attribute("d").unwrap())
    };
    let extent = |p: &[(f64, f64)]| {
        let (xs, ys): (Vec<f64>, Vec<f64>) = p.iter().copied().unzip();
        let span = |v: &[f64]| {
            v.iter().copied().fold(f64::MIN, f64::max) - v.iter().copied().fold(f64::MAX, f64::min)
        };
        (span(&xs), span(&ys))
    };
    let (fw, fh) = extent(&path("frame"));
    assert!((fw - fh).abs() <= 1.0, "panel {fw} x {fh}");
    let (bw, bh) = extent(&path("beam"));
    assert!(
        (bw / fw - 4.5 / 240.0).abs() < 0.5 / fw && (bh / fh - 2.25 / 120.0).abs() < 0.5 / fh,
        "beam drawn {bw} x {bh} in a panel {fw} x {fh}"
    );
    let bar = path("scale-bar");
    let drawn = (bar[1].0 - bar[0].0).abs();
    assert!(
        (drawn / fw - 137.50987 / 4.0 / 240.0).abs() < 0.5 / fw,
        "scale bar drawn {drawn} of a panel {fw} wide"
    );
}

/// A region reaching past the map's edge is clipped to the map and says what is drawn; one
/// inside it says nothing. Common practice (the arithmetic of the box, by hand).
#[test]
fn a_region_past_the_edge_says_what_is_drawn() {
    let dir = tempfile::tempdir().unwrap();
    let m = non_square_map(dir.path());
    // Centre (0, 0), 20 pixels: x and y from -10 to 9 asked for, 0 to 9 on the map.
    let (r, note) = cairn::draw::parse_region("0,0,20px", &m).unwrap();
    assert_eq!(r, (0, 0, 10, 10));
    let note = note.expect("a note for a clipped region");
    assert!(
        note.contains("10 x 10 of the 20 x 20 pixels asked for")
            && note.contains("x 0 to 9, y 0 to 9"),
        "{note}"
    );
    let (r, note) = cairn::draw::parse_region("120,60,20px", &m).unwrap();
    assert_eq!((r, note), ((110, 50, 20, 20), None));
}

/// A `--region` centre given in another frame than the map's (`icrs:`, `fk5:`, `galactic:`
/// first) is converted to the map's frame and placed where astropy 8.0.2 places it:
/// astropy.coordinates SkyCoord.transform_to the map's frame (galactic, or FK5 at equinox
/// J1975) and WCS.all_world2pix (fixtures/draw/region_frames.json,
/// tests/oracle/draw_region_astropy.py). The same numbers without the frame are read in the
/// map's own frame and land elsewhere.
#[test]
fn a_region_centre_in_another_frame_lands_where_astropy_puts_it() {
    let v = fixture_json("draw/region_frames.json");
    let dir = tempfile::tempdir().unwrap();
    for (name, m) in v["maps"].as_object().unwrap() {
        let cards: Vec<String> = m["cards"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| format!("{:<80}", c.as_str().unwrap()))
            .collect();
        let mut h = Header::parse(&cards.concat());
        h.set("BUNIT", cairn::header::Value::Str("Jy/beam".into()), "");
        let (nx, ny) = (
            m["nx"].as_u64().unwrap() as usize,
            m["ny"].as_u64().unwrap() as usize,
        );
        let p = dir.path().join(format!("{name}.fits"));
        let data = ndarray::Array2::from_elem((ny, nx), 1.0f32);
        cairn::fits_write::write_image_f32(&p, data.view(), &h, false).unwrap();
        let map = cairn::map::load(&p, &Default::default()).unwrap();
        for c in m["cases"].as_array().unwrap() {
            let (prefix, lon, lat) = (
                c["prefix"].as_str().unwrap(),
                common::num(&c["lon"]),
                common::num(&c["lat"]),
            );
            let text = format!("{prefix}:{lon},{lat},2arcmin");
            let asked = cairn::draw::region_asked(&text, &map).unwrap();
            let (x, y) = (common::num(&c["x"]), common::num(&c["y"]));
            // 1e-6 pixel is 6e-9 degree on these 6" pixels: the WCS agrees with astropy to
            // 1e-9 degree and the frame conversions to 1e-13 (tests/wcs_astropy.rs).
            common::assert_close(asked.centre.0, x, 0.0, 1e-6, &format!("{name} {text} x"));
            common::assert_close(asked.centre.1, y, 0.0, 1e-6, &format!("{name} {text} y"));
            assert_eq!(asked.note, None, "{text}");
            // Without the frame the numbers are the map's own coordinates, elsewhere or off
            // the map altogether.
            if let Ok(own) = cairn::draw::region_asked(&format!("{lon},{lat},2arcmin"), &map) {
                assert!(
                    (own.centre.0 - x).hypot(own.centre.1 - y) > 10.0,
                    "{name} {text}: the frame changes nothing"
                );
            }
        }
    }
}

/// The ids drawn by a figure's SVG with the given class (`leaf-label` on the map figure,
/// `leaf-id` in the tree), read from their readable text, sorted.
fn drawn_ids(svg: &str, class: &str) -> Vec<u32> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let mut ids: Vec<u32> = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some(class))
        .filter_map(|n| n.attribute("aria-label")?.parse().ok())
        .collect();
    ids.sort_unstable();
    ids
}

/// The stored segmentation's run, made again in `out` without figures, as `cairn draw` reads
/// it.
fn fixture_run(out: &std::path::Path) -> cairn::draw::SavedRun {
    let o = segment_fixture::fixture_options(out);
    cairn::segment::run(&fixture_map(), &o, &|_, _| {}).unwrap();
    cairn::draw::read_run(out, None).unwrap()
}

/// The tree names the leaves `--labels` chooses for the map figure, so a paper's two figures
/// show the same ids, and counts those it has no room for; the ids chosen are worked out here
/// from the catalogue's own words (the N highest peaks, the states), not from cairn's choice.
#[test]
fn the_tree_names_the_leaves_the_map_figure_is_asked_to_name() {
    use cairn::draw::LabelChoice;
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let run = fixture_run(&out);
    let mut leaves: Vec<&cairn::draw::FigStructure> =
        run.structures.iter().filter(|s| s.is_leaf).collect();
    assert!(leaves.len() >= 6, "{} leaves", leaves.len());
    leaves.sort_by(|a, b| b.peak_value.total_cmp(&a.peak_value).then(a.id.cmp(&b.id)));
    let sorted = |mut v: Vec<u32>| {
        v.sort_unstable();
        v
    };
    let all = sorted(leaves.iter().map(|s| s.id).collect());
    let bound = sorted(
        leaves
            .iter()
            .filter(|s| s.state.as_deref() == Some("bound"))
            .map(|s| s.id)
            .collect(),
    );
    let cases = [
        (LabelChoice::All, all.clone()),
        (LabelChoice::None, Vec::new()),
        (
            LabelChoice::Brightest(3),
            sorted(leaves[..3].iter().map(|s| s.id).collect()),
        ),
        (LabelChoice::States(vec![0]), bound),
    ];
    let style_at = |width_px: u32| cairn::render::Style {
        width_px,
        ..Default::default()
    };
    // The narrowest figure the map allows, where the tree is crowded.
    let narrowest = (200..2000)
        .find(|&w| cairn::draw::check_figure_style(&run.map, &style_at(w)).is_ok())
        .unwrap();
    for width in [1600, narrowest] {
        let style = style_at(width);
        for (choice, want) in &cases {
            let input = cairn::draw::FigureInput {
                map: &run.map,
                labels: run.labels.view(),
                structures: run.structures.clone(),
                distance_pc: run.distance_pc,
                title: None,
                label_choice: choice.clone(),
            };
            let figs = cairn::draw::figures(&input, &style).unwrap();
            let (on_map, in_tree) = (
                drawn_ids(&figs.overlay.svg, "leaf-label"),
                drawn_ids(&figs.tree_svg, "leaf-id"),
            );
            let what = format!("{choice:?} at {width} px");
            assert_eq!(figs.labels_chosen, (want.len(), all.len()), "{what}");
            assert_eq!(figs.tree_leaves, want.len(), "{what}");
            assert_eq!(in_tree.len() + figs.tree_ids_left_out, want.len(), "{what}");
            assert!(in_tree.iter().all(|id| want.contains(id)), "{what}");
            assert!(on_map.iter().all(|id| want.contains(id)), "{what}");
            if width == 1600 {
                // Room for every id in both figures: the same ids.
                assert_eq!(figs.tree_ids_left_out, 0, "{what}");
                assert_eq!(figs.overlay.labels_left_out, 0, "{what}");
                assert_eq!(&in_tree, want, "{what}");
                assert_eq!(&on_map, want, "{what}");
            } else if !want.is_empty() {
                // Crowded: the highest peak chosen is among those named.
                let first = leaves.iter().find(|s| want.contains(&s.id)).unwrap();
                assert!(in_tree.contains(&first.id), "{what}: {in_tree:?}");
            }
        }
    }
}

/// The readable texts of a figure's SVG.
fn texts(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter_map(|n| n.attribute("aria-label").map(String::from))
        .collect()
}

/// The tree's level axis names the quantity the map figure's colour bar names: N(H2) with
/// its unit on a column-density map, the unit alone on a map of another kind (here the
/// fixture's pixels read as K km s-1), its powers raised in both (the readable text writes a
/// raised minus as U+2212), and no longer "level".
#[test]
fn the_tree_axis_names_what_the_colour_bar_names() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    let run = fixture_run(&out);
    let mut other = run.map.clone();
    other.unit = Some(cairn::units::PixelUnit::Other);
    other.unit_text = "K km s-1".into();
    for (map, title) in [
        (&run.map, "N(H2) [cm\u{2212}2]"),
        (&other, "K km s\u{2212}1"),
    ] {
        let input = cairn::draw::FigureInput {
            map,
            labels: run.labels.view(),
            structures: run.structures.clone(),
            distance_pc: None,
            title: None,
            label_choice: Default::default(),
        };
        let figs = cairn::draw::figures(&input, &Default::default()).unwrap();
        let (bar, axis) = (texts(&figs.overlay.svg), texts(&figs.tree_svg));
        assert!(bar.iter().any(|t| t == title), "colour bar: {bar:?}");
        assert!(axis.iter().any(|t| t == title), "tree: {axis:?}");
        assert!(!axis.iter().any(|t| t.starts_with("level")), "{axis:?}");
    }
}

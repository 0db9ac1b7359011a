//! `cairn segment` and `cairn draw` on maps of extreme shapes (the figure's size stays
//! bounded), and `cairn draw` on run folders whose files do not belong together (refused with
//! one sentence naming the file).

#[path = "common/cli.rs"]
mod cli;
mod common;

use cairn::header::{Header, Value};
use cli::{Outcome, cairn_limited, demo_run};
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

/// A `n` x `n` map in the SIN projection whose corners lie beyond the sky's edge (4 degrees per
/// pixel: the projection covers 57.3 degrees about its centre), with the bumps of `write_map`.
fn write_sin_map(dir: &Path, name: &str, n: usize) -> PathBuf {
    let p = write_map(dir, name, n, n);
    let m = cairn::map::load(&p, &Default::default()).unwrap();
    let mut h = m.header.clone();
    for (k, v) in [
        ("CTYPE1", Value::Str("RA---SIN".into())),
        ("CTYPE2", Value::Str("DEC--SIN".into())),
        ("CRVAL2", Value::Float(0.0)),
        ("CDELT1", Value::Float(-4.0)),
        ("CDELT2", Value::Float(4.0)),
        ("BMAJ", Value::Float(8.0)),
        ("BMIN", Value::Float(8.0)),
        ("BPA", Value::Float(0.0)),
    ] {
        h.set(k, v, "");
    }
    std::fs::remove_file(&p).unwrap();
    cairn::fits_write::write_image_f32(&p, m.data.view(), &h, false).unwrap();
    p
}

/// Width and height of a PNG file.
fn png_size(p: &Path) -> (u32, u32) {
    let img = image::load_from_memory(&std::fs::read(p).unwrap()).unwrap();
    (img.width(), img.height())
}

/// A figure beyond the drawing's bound (`cairn::render::MAX_FIGURE_PIXELS`: a tall map at the
/// widest --width makes a figure of 20000 x about 39000 pixels, which would take some 12 GB to
/// draw) is refused with one sentence, and the run leaves nothing behind, within 2 GB of
/// memory; so is a square map's figure at that width, from `draw` as from `segment`.
#[test]
fn a_figure_beyond_the_bound_is_refused_and_leaves_nothing() {
    let d = tempfile::tempdir().unwrap();
    write_map(d.path(), "tall.fits", 2, 4000);
    let args = [
        "segment",
        "tall.fits",
        "-o",
        "run",
        "--min-area",
        "2px",
        "--width",
        "20000",
        "-q",
    ];
    let o = cairn(&args, d.path());
    cli::check_refused(&o, &args, "figure of 20000 x", "larger than cairn draws");
    assert!(
        !d.path().join("run").exists(),
        "{:?}",
        cli::listing(d.path())
    );
    let run = demo_run(d.path(), "demo", &[]);
    let args = [
        "draw",
        run.to_str().unwrap(),
        "-o",
        "figs",
        "--width",
        "20000",
    ];
    let o = cairn(&args, d.path());
    cli::check_refused(&o, &args, "figure of 20000 x", "lower --width");
    assert!(
        !d.path().join("figs").exists(),
        "{:?}",
        cli::listing(d.path())
    );
}

/// A region of the figure centred off the sky of its projection is drawn without a beam or a
/// scale bar, whose size in pixels cannot be measured there, rather than failing the run.
#[test]
fn a_region_off_the_sky_is_drawn_without_a_beam() {
    let d = tempfile::tempdir().unwrap();
    write_sin_map(d.path(), "sin.fits", 40);
    let args = [
        "segment",
        "sin.fits",
        "-o",
        "run",
        "--min-area",
        "2px",
        "--region",
        "3,3,6px",
        "-q",
    ];
    let o = cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let svg = std::fs::read_to_string(d.path().join("run/overlay.svg")).unwrap();
    assert!(!svg.contains("class=\"beam\""), "no beam drawn");
    let whole = cairn(&["draw", "run", "-o", "whole", "-q"], d.path());
    assert_eq!(whole.code, 0, "{}", whole.stderr);
    let svg = std::fs::read_to_string(d.path().join("whole/overlay.svg")).unwrap();
    assert!(
        svg.contains("class=\"beam\""),
        "the beam at the map's centre"
    );
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
        // The flat map fills the requested width; the tall one's panel, at most twice that
        // width tall, is narrow, and the figure is narrowed to it (and says so).
        if ny > nx {
            assert!(
                w < 800,
                "{nx} x {ny}: a figure {w} wide beside a narrow panel"
            );
            assert!(
                o.stdout
                    .contains(&format!("figure: {w} pixels wide rather than --width 1600")),
                "{}",
                o.stdout
            );
        } else {
            assert_eq!(w, 1600, "{nx} x {ny}: the requested width");
        }
        assert!((h as f64) < bound(1600), "{nx} x {ny}: overlay {w} x {h}");
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
        assert_eq!(w == 900, ny < nx, "{nx} x {ny}: {w}");
        assert!(
            (h as f64) < bound(900),
            "{nx} x {ny}: redrawn overlay {w} x {h}"
        );
    }
}

/// A copy of the run folder `from` as `dir/name`.
fn copy_run(from: &Path, dir: &Path, name: &str) -> PathBuf {
    let to = dir.join(name);
    std::fs::create_dir(&to).unwrap();
    for e in std::fs::read_dir(from).unwrap() {
        let e = e.unwrap();
        std::fs::copy(e.path(), to.join(e.file_name())).unwrap();
    }
    to
}

/// `cairn draw` on the folder `run` is refused by the rule for bad input (exit 2, one sentence
/// naming `file` and saying `says` and the fix) and writes nothing.
fn assert_draw_refused(dir: &Path, run: &Path, file: &str, says: &str) {
    let out = dir.join(format!(
        "{}-figures",
        run.file_name().unwrap().to_str().unwrap()
    ));
    let before = cli::listing(run);
    let args = ["draw", run.to_str().unwrap(), "-o", out.to_str().unwrap()];
    let o = cairn(&args, dir);
    cli::check_refused(&o, &args, file, says);
    assert!(
        o.stderr.contains("re-run `cairn segment`") && o.stderr.contains("--force"),
        "the fix is named: {}",
        o.stderr
    );
    assert!(!out.exists(), "no figure folder");
    assert_eq!(cli::listing(run), before, "nothing written in the run");
}

/// The data rows of a catalogue (after its `#` notes and its header).
fn csv_parts(text: &str) -> (Vec<&str>, Vec<&str>) {
    text.lines().partition(|l| l.starts_with('#'))
}

#[test]
fn draw_refuses_run_folders_whose_files_do_not_belong_together() {
    let d = tempfile::tempdir().unwrap();
    let good = demo_run(d.path(), "good", &[]);
    // The untouched run draws (the checks accept what segment writes) ...
    let o = cairn(&["draw", "good", "-o", "good-figures", "-q"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    // ... and so does a run made with --leaves-only, whose catalogue lists leaves only.
    demo_run(d.path(), "leaves", &["--leaves-only"]);
    let o = cairn(&["draw", "leaves", "-o", "leaves-figures", "-q"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    // Sorting the catalogue's rows changes nothing the figures need.
    let sorted = copy_run(&good, d.path(), "sorted");
    let text = std::fs::read_to_string(sorted.join("structures.csv")).unwrap();
    let (notes, mut rows) = csv_parts(&text);
    let header = rows.remove(0);
    rows.reverse();
    let back = [notes, vec![header], rows].concat().join("\n") + "\n";
    std::fs::write(sorted.join("structures.csv"), back).unwrap();
    let o = cairn(&["draw", "sorted", "-o", "sorted-figures", "-q"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);

    // Another run's label map of the same shape: other thresholds, other structures, with
    // ids beyond those of this run's hierarchy ...
    let other = demo_run(
        d.path(),
        "other",
        &["--floor", "6sigma", "--prominence", "5sigma"],
    );
    let mixed = copy_run(&good, d.path(), "mixed");
    std::fs::copy(other.join("labels.fits"), mixed.join("labels.fits")).unwrap();
    assert_draw_refused(d.path(), &mixed, "labels.fits", "another run");
    // ... or fewer structures, all of whose ids this run has too (the leaves' peaks tell).
    let few = demo_run(d.path(), "few", &["--prominence", "10sigma"]);
    let mixed = copy_run(&good, d.path(), "mixed-few");
    std::fs::copy(few.join("labels.fits"), mixed.join("labels.fits")).unwrap();
    assert_draw_refused(d.path(), &mixed, "labels.fits", "peak pixel");

    // Label ids shifted by +500.
    let shifted = copy_run(&good, d.path(), "shifted");
    let lab = cairn::map::load(
        &shifted.join("labels.fits"),
        &cairn::map::LoadOptions {
            require_unit: false,
            ..Default::default()
        },
    )
    .unwrap();
    let moved = lab
        .data
        .mapv(|v| if v >= 0.0 { v as i32 + 500 } else { -1 });
    cairn::fits_write::write_image_i32(
        &shifted.join("labels.fits"),
        moved.view(),
        &lab.header,
        true,
    )
    .unwrap();
    assert_draw_refused(d.path(), &shifted, "labels.fits", "another run");

    // Edited records: no input map, a beam no map has, a merge level that is no number.
    let edit = |name: &str, file: &str, from: &str, to: &str| {
        let run = copy_run(&good, d.path(), name);
        let text = std::fs::read_to_string(run.join(file)).unwrap();
        assert!(text.contains(from), "{file} holds {from}");
        std::fs::write(run.join(file), text.replacen(from, to, 1)).unwrap();
        run
    };
    let no_input = edit("no-input", "run.json", "\"path\":", "\"former_path\":");
    assert_draw_refused(d.path(), &no_input, "run.json", "records no input map");
    let beam = edit(
        "bad-beam",
        "run.json",
        "\"major_deg\": ",
        "\"major_deg\": -",
    );
    assert_draw_refused(d.path(), &beam, "run.json", "which no map has");
    let hdu = edit("bad-hdu", "run.json", "\"hdu\": 0", "\"hdu\": \"first\"");
    assert_draw_refused(d.path(), &hdu, "run.json", "is not a zero-based index");
    // The label map saved again as 32-bit floats (fractional labels would be truncated).
    let floats = copy_run(&good, d.path(), "float-labels");
    let lab = cairn::map::load(
        &floats.join("labels.fits"),
        &cairn::map::LoadOptions {
            require_unit: false,
            ..Default::default()
        },
    )
    .unwrap();
    std::fs::remove_file(floats.join("labels.fits")).unwrap();
    cairn::fits_write::write_image_f32(
        &floats.join("labels.fits"),
        lab.data.view(),
        &lab.header,
        true,
    )
    .unwrap();
    assert_draw_refused(d.path(), &floats, "labels.fits", "BITPIX = -32");
    let size = edit("bad-size", "run.json", "\"nx\": ", "\"nx\": 1");
    assert_draw_refused(d.path(), &size, "run.json", "records a map of 1");
    let level = edit(
        "bad-level",
        "hierarchy.json",
        "\"merge_level\": ",
        "\"merge_level\": null, \"was\": ",
    );
    assert_draw_refused(d.path(), &level, "hierarchy.json", "the file was changed");

    // Catalogue rows deleted (the last two).
    let cut = copy_run(&good, d.path(), "cut");
    let text = std::fs::read_to_string(cut.join("structures.csv")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let kept = lines[..lines.len() - 2].join("\n") + "\n";
    std::fs::write(cut.join("structures.csv"), kept).unwrap();
    assert_draw_refused(d.path(), &cut, "structures.csv", "rows were deleted");

    // A row given twice.
    let twice = copy_run(&good, d.path(), "twice");
    let text = std::fs::read_to_string(twice.join("structures.csv")).unwrap();
    let last = text.lines().last().unwrap().to_string();
    std::fs::write(twice.join("structures.csv"), text + &last + "\n").unwrap();
    assert_draw_refused(d.path(), &twice, "structures.csv", "two rows");

    // A state that is none of the documented words (README: bound, marginal, unbound or
    // unknown).
    let wobbly = copy_run(&good, d.path(), "wobbly");
    let text = std::fs::read_to_string(wobbly.join("structures.csv")).unwrap();
    let (notes, rows) = csv_parts(&text);
    let col = rows[0].split(',').position(|c| c == "state").unwrap();
    let mut changed: Vec<String> = rows.iter().map(|r| r.to_string()).collect();
    let mut fields: Vec<&str> = rows[1].split(',').collect();
    fields[col] = "wobbly";
    changed[1] = fields.join(",");
    let back = [
        notes.iter().map(|s| s.to_string()).collect::<Vec<_>>(),
        changed,
    ]
    .concat()
    .join("\n")
        + "\n";
    std::fs::write(wobbly.join("structures.csv"), back).unwrap();
    assert_draw_refused(d.path(), &wobbly, "structures.csv", "'wobbly'");

    // Another run's hierarchy file (more structures than the catalogue lists).
    let tree = copy_run(&good, d.path(), "tree");
    std::fs::copy(other.join("hierarchy.json"), tree.join("hierarchy.json")).unwrap();
    assert_draw_refused(d.path(), &tree, "structures.csv", "different runs");
}

/// A run on the map smoothed to a common linear resolution: `draw` smooths the file's map in
/// the same way again (from the run record's resolution, distance and the file's own beam) and
/// draws the same figure, byte for byte, as `segment` did.
#[test]
fn draw_redoes_the_smoothing_of_a_common_resolution_run() {
    let d = tempfile::tempdir().unwrap();
    let run = demo_run(d.path(), "smoothed", &["--common-resolution", "0.06pc"]);
    // The demo run has no figure; make one with segment's own defaults, then with draw.
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let o = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "drawn",
            "--distance",
            "410pc",
            "--temperature",
            "14K",
            "--common-resolution",
            "0.06pc",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(
        &["draw", run.to_str().unwrap(), "-o", "again", "-q"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    for f in ["overlay.png", "overlay.svg", "overlay.pdf"] {
        assert!(
            std::fs::read(d.path().join("drawn").join(f)).unwrap()
                == std::fs::read(d.path().join("again").join(f)).unwrap(),
            "{f} differs"
        );
    }
}

/// A sky centre for --region is read in the map's own frame: one that falls off the map (here
/// galactic-looking numbers given to an equatorial map) is refused with a sentence naming the
/// frame, and nothing is written.
#[test]
fn a_region_centre_off_the_map_names_the_frame() {
    let d = tempfile::tempdir().unwrap();
    write_map(d.path(), "eq.fits", 200, 100);
    let args = [
        "segment",
        "eq.fits",
        "-o",
        "run",
        "--min-area",
        "2px",
        "--region",
        "45.0,-1.5,2arcmin",
        "-q",
    ];
    let o = cairn(&args, d.path());
    cli::check_refused(
        &o,
        &args,
        "--region",
        "the map's own frame (equatorial RA,Dec)",
    );
    assert!(!d.path().join("run").exists());
}

#[path = "common/svg_layout.rs"]
mod svg_layout;

/// Zooms into the demo map (a 3' region, drawn 900 pixels wide, where the scale bar's text is
/// wider than its bar): the scale bar and its text lie inside the map's frame, and every leaf
/// id is clear of every drawn outline when the frame leaves room, and of the bar and its text
/// (read from the SVG).
#[test]
fn a_zoomed_region_keeps_its_scale_bar_and_ids_clear() {
    let d = tempfile::tempdir().unwrap();
    let run = demo_run(d.path(), "demo", &[]);
    for (k, region) in [
        "152.8125,11.40625,3arcmin",
        "152.87,11.525,3arcmin",
        "152.8125,11.40625,6arcmin",
    ]
    .into_iter()
    .enumerate()
    {
        let out = format!("zoom{k}");
        let o = cairn(
            &[
                "draw",
                run.to_str().unwrap(),
                "-o",
                &out,
                "--region",
                region,
                "--width",
                "900",
                "-q",
            ],
            d.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        let svg = std::fs::read_to_string(d.path().join(&out).join("overlay.svg")).unwrap();
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let class_is = |n: &roxmltree::Node, c: &str| {
            n.attribute("class")
                .is_some_and(|x| x.split(' ').next() == Some(c))
        };
        let paths: Vec<roxmltree::Node> = doc
            .descendants()
            .filter(|n| n.has_tag_name("path"))
            .collect();
        let frame = svg_layout::bounds(
            paths
                .iter()
                .find(|n| class_is(n, "frame"))
                .unwrap()
                .attribute("d")
                .unwrap(),
        );
        let within = |b: svg_layout::Bounds| {
            b.0 >= frame.0 && b.1 >= frame.1 && b.2 <= frame.2 && b.3 <= frame.3
        };
        let bar = paths.iter().find(|n| class_is(n, "scale-bar")).unwrap();
        let bar = svg_layout::bounds(bar.attribute("d").unwrap());
        let text = paths
            .iter()
            .find(|n| {
                n.attribute("aria-label")
                    .is_some_and(|l| l.ends_with(" pc"))
                    && n.attribute("fill") != Some("none")
            })
            .unwrap();
        let text = svg_layout::bounds(text.attribute("d").unwrap());
        assert!(
            within(bar) && within(text),
            "{region}: {bar:?} {text:?} in {frame:?}"
        );
        // Leaf ids against the outlines (their rings as drawn, clipped to the frame).
        let outlines: Vec<Vec<(f64, f64)>> = paths
            .iter()
            .filter(|n| class_is(n, "leaf"))
            .flat_map(|n| {
                svg_layout::clipped(&svg_layout::subpaths(n.attribute("d").unwrap()), frame)
            })
            .collect();
        let ids: Vec<svg_layout::Bounds> = paths
            .iter()
            .filter(|n| class_is(n, "leaf-label") && n.attribute("fill") != Some("none"))
            .map(|n| svg_layout::bounds(n.attribute("d").unwrap()))
            .collect();
        assert!(!ids.is_empty() && !outlines.is_empty(), "{region}");
        for b in &ids {
            assert!(within(*b), "{region}: id at {b:?}");
            // Apart by more than their halos (cairn keeps 0.3 of the 9 pt text size, 11 px at
            // 300 dpi, from the bar's and text's boxes).
            let gap =
                |t: svg_layout::Bounds| (b.0 - t.2).max(t.0 - b.2).max(b.1 - t.3).max(t.1 - b.3);
            assert!(
                gap(bar) > 6.0 && gap(text) > 6.0,
                "{region}: an id at {b:?} on or next to the scale bar {bar:?} or its text {text:?}"
            );
            assert!(
                svg_layout::distance(&outlines, *b) > 0.0,
                "{region}: an id at {b:?} crosses an outline"
            );
        }
    }
}

/// The leaf ids of the 850 um demo map (crowded at these widths: 9 pt ids are larger than
/// the gaps between many leaves) follow the rule: each id is nearer its own leaf than any
/// other and touches no other, or stands farther out on a leader line that starts on its own
/// leaf; the ids drawn and those counted as left out add up to the leaves.
#[test]
fn demo_leaf_ids_are_nearest_their_own_leaves_or_on_leader_lines() {
    let d = tempfile::tempdir().unwrap();
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let mut args = vec!["segment", map.to_str().unwrap(), "-o", "run"];
    args.extend_from_slice(&cli::DEMO_RUN);
    let o = cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let hierarchy: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(d.path().join("run/hierarchy.json")).unwrap(),
    )
    .unwrap();
    let text = hierarchy.to_string();
    let n_leaves = text.matches("\"kind\":\"leaf\"").count();
    assert!(n_leaves > 20, "{n_leaves} leaves");
    for width in ["1200", "1600"] {
        let out = format!("w{width}");
        let o = cairn(&["draw", "run", "-o", &out, "--width", width], d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
        let svg = std::fs::read_to_string(d.path().join(&out).join("overlay.svg")).unwrap();
        let (labels, _leaders) = svg_layout::check_leaf_labels(&svg, 0.02);
        let left_out: usize = o
            .stdout
            .lines()
            .chain(o.stderr.lines())
            .find(|l| l.contains("left without a label"))
            .map(|l| l.split_whitespace().nth(1).unwrap().parse().unwrap())
            .unwrap_or(0);
        assert_eq!(labels + left_out, n_leaves, "width {width}");
        assert!(
            labels * 10 >= n_leaves * 9,
            "width {width}: {labels} ids drawn"
        );
    }
}

/// `draw --width` below what the demo map needs beside its labels names the narrowest width
/// that works, and that width draws a map panel at least an inch wide; an empty `--range` is
/// refused in one sentence.
#[test]
fn draw_states_the_true_narrowest_width_and_refuses_an_empty_range() {
    let d = tempfile::tempdir().unwrap();
    let run = demo_run(d.path(), "demo", &[]);
    let run = run.to_str().unwrap();
    let o = cairn(&["draw", run, "-o", "a", "--width", "250"], d.path());
    assert_eq!(o.code, 2, "{}", o.stderr);
    let needed: u32 = o
        .stderr
        .split("at least ")
        .nth(1)
        .and_then(|t| t.split_whitespace().next())
        .and_then(|n| n.parse().ok())
        .unwrap_or_else(|| panic!("no width in {}", o.stderr));
    assert_eq!(o.stderr.trim().lines().count(), 1, "{}", o.stderr);
    let o = cairn(
        &["draw", run, "-o", "b", "--width", &(needed - 1).to_string()],
        d.path(),
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(
        o.stderr.contains(&format!("at least {needed} pixels")),
        "{}",
        o.stderr
    );
    let o = cairn(
        &["draw", run, "-o", "c", "-q", "--width", &needed.to_string()],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(d.path().join("c/overlay.png").exists());
    // At that width the map panel (the frame's clip) is at least an inch across at the
    // default 300 dpi (cairn's least panel), and the bottom axis's labels stand apart.
    let svg = std::fs::read_to_string(d.path().join("c/overlay.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let clip = doc
        .descendants()
        .find(|n| n.has_tag_name("clipPath"))
        .and_then(|c| c.children().find(|n| n.has_tag_name("rect")))
        .expect("the frame's clip");
    let panel: f64 = clip.attribute("width").unwrap().parse().unwrap();
    assert!(panel >= 300.0, "a panel {panel} px wide");
    for range in ["0.1,0.1", "-3,-3"] {
        let o = cairn(&["draw", run, "-o", "e", "--range", range], d.path());
        assert_eq!(o.code, 2, "{range}: {}", o.stderr);
        assert!(
            o.stderr.contains("--range") && o.stderr.contains("LOW,HIGH"),
            "{}",
            o.stderr
        );
        assert_eq!(o.stderr.trim().lines().count(), 1, "{}", o.stderr);
        assert!(
            !d.path().join("e").exists(),
            "nothing written for --range {range}"
        );
    }
}

/// `draw --region` reaching past the map's edge warns once on stderr what part is drawn.
#[test]
fn a_region_past_the_edge_is_said_once_on_stderr() {
    let d = tempfile::tempdir().unwrap();
    let run = demo_run(d.path(), "demo", &[]);
    let args = [
        "draw",
        run.to_str().unwrap(),
        "-o",
        "figs",
        "--region",
        "0,0,100px",
        "-q",
    ];
    let o = cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let lines: Vec<&str> = o
        .stderr
        .lines()
        .filter(|l| l.contains("reaches past the map's edge"))
        .collect();
    assert_eq!(lines.len(), 1, "{}", o.stderr);
    assert!(
        lines[0].starts_with("warning: --region '0,0,100px'")
            && lines[0].contains("50 x 50 of the 100 x 100 pixels asked for"),
        "{}",
        lines[0]
    );
    assert!(d.path().join("figs/overlay.png").is_file());
}

/// The legend entries of a figure's SVG: the readable text of each legend line that starts
/// with a state's name or the branches' entry.
fn legend_entries(svg: &str) -> Vec<String> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter_map(|n| n.attribute("aria-label"))
        .filter(|l| {
            ["bound:", "marginal:", "unbound:", "unknown:", "branch:"]
                .iter()
                .any(|k| l.starts_with(k))
        })
        .map(str::to_string)
        .collect()
}

/// The states of the leaves in a run's catalogue ("unknown" for all of them in a catalogue
/// without a state column, as `draw` reads it).
fn leaf_states(run: &Path) -> std::collections::BTreeSet<String> {
    let text = std::fs::read_to_string(run.join("structures.csv")).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |k: &str| head.iter().position(|h| *h == k);
    let (kind, state) = (col("kind").unwrap(), col("state"));
    lines
        .map(|l| l.split(',').collect::<Vec<_>>())
        .filter(|f| f[kind] == "leaf")
        .map(|f| state.map_or("unknown", |s| f[s]).to_string())
        .collect()
}

/// The legend lists the states the run's leaves have and no other, with the bound state's
/// symbols; with `--branches` it has an entry for the branch outlines; a run whose map is read
/// without a unit says that is why its leaves have no state (not a missing distance or
/// temperature); and the tree's level axis, titled as the colour bar (N(H_2) on this
/// column-density map), writes the unit's power as a superscript (a true minus sign, U+2212,
/// in the readable text).
#[test]
fn the_legend_lists_the_states_present_and_why_a_state_is_unknown() {
    let d = tempfile::tempdir().unwrap();
    let run = demo_run(d.path(), "demo", &[]);
    let states = leaf_states(&run);
    let o = cairn(
        &[
            "draw",
            run.to_str().unwrap(),
            "-o",
            "figs",
            "--branches",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let svg = std::fs::read_to_string(d.path().join("figs/overlay.svg")).unwrap();
    let entries = legend_entries(&svg);
    let named: std::collections::BTreeSet<String> = entries
        .iter()
        .filter(|e| !e.starts_with("branch:"))
        .map(|e| e.split(':').next().unwrap().to_string())
        .collect();
    assert_eq!(named, states, "{entries:?}");
    assert!(
        svg.contains("class=\"branch\"")
            && entries.iter().any(|e| e.starts_with("branch: outline")),
        "{entries:?}"
    );
    if states.contains("bound") {
        assert!(
            entries
                .iter()
                .any(|e| e.starts_with("bound: \u{3b1}BE \u{2264} 1")),
            "{entries:?}"
        );
    }
    let tree = std::fs::read_to_string(d.path().join("figs/tree.svg")).unwrap();
    let tree_entries = legend_entries(&tree);
    assert_eq!(tree_entries.len(), states.len(), "{tree_entries:?}");
    assert!(
        tree.contains("aria-label=\"N(H2) [cm\u{2212}2]\""),
        "no N(H_2) [cm^-2] axis title"
    );

    let none = demo_run(d.path(), "none", &["--unit", "none"]);
    assert_eq!(
        leaf_states(&none),
        ["unknown".to_string()].into_iter().collect()
    );
    let o = cairn(
        &["draw", none.to_str().unwrap(), "-o", "figs-none", "-q"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let svg = std::fs::read_to_string(d.path().join("figs-none/overlay.svg")).unwrap();
    assert_eq!(
        legend_entries(&svg),
        vec!["unknown: the map is read with no unit, so no masses".to_string()]
    );
}

/// `--stretch log` on a map whose lower colour limit is not positive (the faint ripple of
/// `write_map` goes below zero) says once on stderr that the colours follow log(1 + 1000 t)
/// instead, from `segment` (not with `--no-figure`) and from `draw`; a positive --range draws a true logarithmic scale
/// without a word, and so does another stretch.
#[test]
fn a_log_stretch_that_cannot_take_logarithms_warns_once() {
    let d = tempfile::tempdir().unwrap();
    write_map(d.path(), "m.fits", 200, 100);
    let says = |o: &Outcome| {
        o.stderr
            .lines()
            .filter(|l| l.starts_with("warning: --stretch log") && l.contains("log(1 + 1000 t)"))
            .count()
    };
    let o = cairn(
        &["segment", "m.fits", "-o", "run", "--stretch", "log", "-q"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert_eq!(says(&o), 1, "{}", o.stderr);
    // Without a figure there is nothing to warn about.
    let o = cairn(
        &[
            "segment",
            "m.fits",
            "-o",
            "nofig",
            "--stretch",
            "log",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert_eq!(says(&o), 0, "{}", o.stderr);
    for (args, n) in [
        (&["--stretch", "log"][..], 1),
        (&["--stretch", "log", "--range", "0.05,1"][..], 0),
        (&["--stretch", "sqrt"][..], 0),
    ] {
        let mut all = vec!["draw", "run", "-o", "figs", "--force", "-q"];
        all.extend_from_slice(args);
        let o = cairn(&all, d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
        assert_eq!(says(&o), n, "{args:?}: {}", o.stderr);
    }
}

/// A beam drawn smaller than a few figure pixels (an 18" beam on a 2000 x 100 map of 6"
/// pixels at 1600 px is about 2 px) is said to be too small to be seen, from segment and
/// from draw; a figure wide enough shows it without a word.
#[test]
fn a_beam_too_small_to_see_is_said() {
    let d = tempfile::tempdir().unwrap();
    write_map(d.path(), "wide.fits", 2000, 100);
    let says = |o: &Outcome| {
        o.stdout.contains("figure: the beam is drawn") && o.stdout.contains("too small to be seen")
    };
    let o = cairn(
        &[
            "segment",
            "wide.fits",
            "-o",
            "run",
            "--beam",
            "18arcsec",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(says(&o), "{}", o.stdout);
    let o = cairn(
        &["draw", "run", "-o", "w", "--width", "6000", "-q"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!says(&o), "{}", o.stdout);
    let o = cairn(&["draw", "run", "-o", "n", "-q"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(says(&o), "{}", o.stdout);
}

/// `draw RUN` writes into the run folder by default, where `segment` drew its figures: it is
/// refused there without --force (the project's rule for existing outputs), naming the files
/// and both ways out, and leaves them as they were; with --force it replaces them.
#[test]
fn drawing_again_into_the_run_folder_needs_force() {
    let d = tempfile::tempdir().unwrap();
    write_map(d.path(), "map.fits", 60, 40);
    let o = cairn(&["segment", "map.fits", "-o", "run", "-q"], d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let png = d.path().join("run/overlay.png");
    let before = std::fs::read(&png).unwrap();
    let again = cairn(&["draw", "run", "--stretch", "sqrt", "-q"], d.path());
    assert_eq!(again.code, 2, "{}", again.stderr);
    for says in ["run", "already holds", "overlay.png", "--force", "-o"] {
        assert!(again.stderr.contains(says), "{says}: {}", again.stderr);
    }
    assert_eq!(again.stderr.trim().lines().count(), 1, "{}", again.stderr);
    assert_eq!(
        std::fs::read(&png).unwrap(),
        before,
        "the figure is untouched"
    );
    let forced = cairn(
        &["draw", "run", "--stretch", "sqrt", "--force", "-q"],
        d.path(),
    );
    assert_eq!(forced.code, 0, "{}", forced.stderr);
    assert_ne!(
        std::fs::read(&png).unwrap(),
        before,
        "redrawn with the new stretch"
    );
}

/// `draw RUN -o OTHER`, where OTHER is the folder of another run (another map, or the same map
/// with other thresholds), is refused with or without --force, naming what differs and leaving
/// OTHER's figures as they were; a copy of the run's own folder and the run folder itself
/// (given as -o) are drawn into.
#[test]
fn drawing_into_another_runs_folder_is_refused() {
    let d = tempfile::tempdir().unwrap();
    write_map(d.path(), "map.fits", 60, 40);
    write_map(d.path(), "wide.fits", 70, 40);
    for (map, run, extra) in [
        ("map.fits", "a", None),
        ("wide.fits", "b", None),
        ("map.fits", "c", Some("--min-area")),
    ] {
        let mut args = vec!["segment", map, "-o", run, "-q"];
        if let Some(opt) = extra {
            args.extend_from_slice(&[opt, "20"]);
        }
        let o = cairn(&args, d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    for (other, says) in [("b", "input SHA-256"), ("c", "thresholds and options")] {
        let before = std::fs::read(d.path().join(other).join("overlay.png")).unwrap();
        let listing = cli::listing(&d.path().join(other));
        for force in [false, true] {
            let mut args = vec!["draw", "a", "-o", other, "--stretch", "sqrt"];
            if force {
                args.push("--force");
            }
            let o = cairn(&args, d.path());
            cli::check_refused(&o, &args, other, "holds another run");
            assert!(
                o.stderr.contains(says) && o.stderr.contains("-o a folder of its own"),
                "{}",
                o.stderr
            );
            assert_eq!(cli::listing(&d.path().join(other)), listing);
            assert_eq!(
                std::fs::read(d.path().join(other).join("overlay.png")).unwrap(),
                before,
                "{other}'s figure untouched"
            );
        }
    }
    let copy = copy_run(&d.path().join("a"), d.path(), "a-copy");
    for out in [copy.to_str().unwrap(), "a", "./a/"] {
        let o = cairn(
            &["draw", "a", "-o", out, "--stretch", "sqrt", "--force", "-q"],
            d.path(),
        );
        assert_eq!(o.code, 0, "{out}: {}", o.stderr);
    }
}

/// Sky coordinates typed sexagesimally, as `inspect` prints them, mean the same as in degrees
/// (an hour of right ascension is 15 degrees): a synthetic map centred at 10h11m15s,-31d37m30s
/// is the one centred at 152.8125,-31.625, byte for byte, and a region drawn around a
/// sexagesimal centre is the region drawn around the same centre in degrees. A sexagesimal
/// centre with a size in pixels is refused.
#[test]
fn sexagesimal_centres_equal_their_degrees() {
    let d = tempfile::tempdir().unwrap();
    for (out, centre) in [("deg", "152.8125,-31.625"), ("sex", "10h11m15s,-31d37m30s")] {
        let o = cairn(
            &[
                "synth", "-o", out, "--size", "96", "--cores", "6", "--centre", centre, "-q",
            ],
            d.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let map = |out: &str| std::fs::read(d.path().join(out).join("synth.fits")).unwrap();
    assert_eq!(map("deg"), map("sex"));
    let o = cairn(
        &[
            "segment",
            "deg/synth.fits",
            "-o",
            "run",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    for (out, region) in [
        ("r1", "152.8125,-31.625,4arcmin"),
        ("r2", "10h11m15s,-31d37m30s,4arcmin"),
    ] {
        let o = cairn(
            &["draw", "run", "-o", out, "--region", region, "-q"],
            d.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
    }
    let png = |out: &str| std::fs::read(d.path().join(out).join("overlay.png")).unwrap();
    assert_eq!(png("r1"), png("r2"));
    let o = cairn(
        &[
            "draw",
            "run",
            "-o",
            "r3",
            "--region",
            "10h11m15s,-31d37m30s,40px",
        ],
        d.path(),
    );
    assert_eq!(o.code, 2, "{}", o.stderr);
    assert!(
        o.stderr
            .contains("has a sky centre, so its size is an angle"),
        "{}",
        o.stderr
    );
    assert!(!d.path().join("r3").exists());
}

/// The legend says the criterion the states come from: with `--sigma-nt` every leaf's state
/// follows its virial parameter (Bertoldi & McKee 1992's alpha_vir, bound at 2, cairn's
/// marginal band to 4), without it alpha_BE (bound at 1, marginal to 2); `draw` reads which
/// from the catalogue's alpha_vir column and draws the same legend.
#[test]
fn the_legend_names_the_criterion_the_states_follow() {
    let d = tempfile::tempdir().unwrap();
    for (name, extra, words) in [
        (
            "virial",
            &["--sigma-nt", "0.3km/s"][..],
            [
                "\u{3b1}vir \u{2264} 2",
                "2 < \u{3b1}vir \u{2264} 4",
                "\u{3b1}vir > 4",
            ],
        ),
        (
            "be",
            &[][..],
            [
                "\u{3b1}BE \u{2264} 1",
                "1 < \u{3b1}BE \u{2264} 2",
                "\u{3b1}BE > 2",
            ],
        ),
    ] {
        let run = demo_run(d.path(), name, extra);
        let states = leaf_states(&run);
        let figs = format!("figs-{name}");
        let o = cairn(
            &["draw", run.to_str().unwrap(), "-o", &figs, "-q"],
            d.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        let svg = std::fs::read_to_string(d.path().join(&figs).join("overlay.svg")).unwrap();
        let entries = legend_entries(&svg);
        let mut checked = 0;
        for (state, w) in ["bound", "marginal", "unbound"].iter().zip(words) {
            if states.contains(*state) {
                assert!(
                    entries.contains(&format!("{state}: {w}")),
                    "{name}: {state}: {w} not in {entries:?}"
                );
                checked += 1;
            }
        }
        assert!(checked >= 1, "{name}: no state to check in {entries:?}");
        // segment's own figure, drawn from what it measured, has the same legend as draw's,
        // read from the catalogue.
        let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
        let seg = format!("seg-{name}");
        let mut args = vec![
            "segment",
            map.to_str().unwrap(),
            "-o",
            &seg,
            "--distance",
            "410pc",
            "--temperature",
            "14K",
            "-q",
        ];
        args.extend_from_slice(extra);
        let o = cairn(&args, d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
        let own = std::fs::read_to_string(d.path().join(&seg).join("overlay.svg")).unwrap();
        assert_eq!(legend_entries(&own), entries, "{name}: segment's legend");
        let other = if name == "virial" { "BE" } else { "vir" };
        assert!(
            !entries.iter().any(|e| e.contains(other)),
            "{name}: {entries:?}"
        );
    }
}

/// On the whole 850 um demo map drawn 1000 pixels wide, where a leaf lies just above the scale
/// bar's text, no leaf id stands on or next to the bar or its text: ids keep more than 10
/// pixels from both (cairn keeps 0.3 of the 9 pt text size, 11 px at 300 dpi, beyond their
/// boxes; without it the nearest id stood 7 px from the text; read from the SVG).
#[test]
fn leaf_ids_keep_clear_of_the_scale_bar() {
    let d = tempfile::tempdir().unwrap();
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let o = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "run",
            "--distance",
            "410pc",
            "--temperature",
            "14K",
            "--width",
            "1000",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let svg = std::fs::read_to_string(d.path().join("run/overlay.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let bounds_of = |pred: &dyn Fn(&roxmltree::Node) -> bool| -> Vec<svg_layout::Bounds> {
        doc.descendants()
            .filter(|n| n.has_tag_name("path") && pred(n) && n.attribute("fill") != Some("none"))
            .map(|n| svg_layout::bounds(n.attribute("d").unwrap()))
            .collect()
    };
    fn first(c: &'static str) -> impl Fn(&roxmltree::Node) -> bool {
        move |n: &roxmltree::Node| {
            n.attribute("class")
                .is_some_and(|x| x.split(' ').next() == Some(c))
        }
    }
    let bar = bounds_of(&first("scale-bar"))[0];
    let text = bounds_of(&|n| n.attribute("aria-label") == Some("1 pc"))[0];
    let ids = bounds_of(&first("leaf-label"));
    assert!(ids.len() > 20, "{} ids", ids.len());
    let gap = |b: svg_layout::Bounds, t: svg_layout::Bounds| {
        (b.0 - t.2).max(t.0 - b.2).max(b.1 - t.3).max(t.1 - b.3)
    };
    for b in ids {
        assert!(
            gap(b, bar) > 10.0 && gap(b, text) > 10.0,
            "an id at {b:?} on or next to the scale bar {bar:?} or its text {text:?}"
        );
    }
}

/// The ids of the labels drawn on a map figure (each label's `id="label-N"`), sorted.
fn labelled_ids(svg: &str) -> Vec<u32> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let mut ids: Vec<u32> = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("leaf-label"))
        .filter_map(|n| n.attribute("id")?.strip_prefix("label-")?.parse().ok())
        .collect();
    ids.sort_unstable();
    ids.dedup();
    ids
}

/// A leaf of a run's catalogue: (id, peak, state, mass).
type CatalogueLeaf = (u32, f64, String, f64);

/// The leaves of a run's catalogue.
fn catalogue_leaves(run: &Path) -> Vec<CatalogueLeaf> {
    let text = std::fs::read_to_string(run.join("structures.csv")).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |k: &str| head.iter().position(|h| *h == k).unwrap();
    let (id, kind, peak, state, mass) = (
        col("id"),
        col("kind"),
        col("peak"),
        col("state"),
        col("mass"),
    );
    lines
        .map(|l| l.split(',').collect::<Vec<_>>())
        .filter(|f| f[kind] == "leaf")
        .map(|f| {
            (
                f[id].parse().unwrap(),
                f[peak].parse().unwrap(),
                f[state].to_string(),
                f[mass].parse().unwrap(),
            )
        })
        .collect()
}

/// `--labels` chooses which leaves get their id on the map figure, every leaf still outlined:
/// states, the N highest peaks, a least mass, none; the summary says how many were chosen. A
/// mass without masses in the run, and a word that is no state, are refused with nothing
/// written. The expected ids are read from the run's own catalogue.
#[test]
fn labels_choose_which_leaves_get_an_id() {
    let d = tempfile::tempdir().unwrap();
    let run = demo_run(d.path(), "run", &[]);
    let leaves = catalogue_leaves(&run);
    assert!(leaves.len() > 20, "{} leaves", leaves.len());
    let draw = |out: &str, which: &str| -> (Vec<u32>, usize, String) {
        let o = cairn(
            &[
                "draw", "run", "-o", out, "--labels", which, "--width", "2400",
            ],
            d.path(),
        );
        assert_eq!(o.code, 0, "{which}: {}", o.stderr);
        let svg = std::fs::read_to_string(d.path().join(out).join("overlay.svg")).unwrap();
        let outlined = svg.matches("class=\"leaf state-").count();
        (labelled_ids(&svg), outlined, o.stdout)
    };
    let ids_where = |keep: &dyn Fn(&CatalogueLeaf) -> bool| -> Vec<u32> {
        let mut v: Vec<u32> = leaves.iter().filter(|l| keep(l)).map(|l| l.0).collect();
        v.sort_unstable();
        v
    };
    // Every leaf, at a width with room for all of them.
    let (all, outlined, _) = draw("all", "all");
    assert_eq!(all, ids_where(&|_| true));
    assert_eq!(outlined, leaves.len());
    // States.
    let bound = ids_where(&|l| l.2 == "bound");
    let bound_marginal = ids_where(&|l| l.2 == "bound" || l.2 == "marginal");
    assert!(!bound.is_empty() && bound_marginal.len() > bound.len());
    let (ids, outlined, out) = draw("b", "bound");
    assert_eq!(ids, bound);
    assert_eq!(outlined, leaves.len());
    assert!(
        out.contains(&format!(
            "figure: {} of {} leaves chosen for a label by --labels bound",
            bound.len(),
            leaves.len()
        )),
        "{out}"
    );
    assert_eq!(draw("bm", "marginal,Bound").0, bound_marginal);
    // The five highest peaks.
    let mut by_peak = leaves.clone();
    by_peak.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
    let mut top: Vec<u32> = by_peak[..5].iter().map(|l| l.0).collect();
    top.sort_unstable();
    assert_eq!(draw("top", "5").0, top);
    // A least mass, between two of the leaves' masses.
    let mut masses: Vec<f64> = leaves.iter().map(|l| l.3).collect();
    masses.sort_by(f64::total_cmp);
    let cut = masses[masses.len() / 2];
    let (ids, _, _) = draw("m", &format!("{cut}Msun"));
    assert_eq!(ids, ids_where(&|l| l.3 >= cut));
    // None: outlines only.
    let (ids, outlined, _) = draw("none", "none");
    assert!(ids.is_empty());
    assert_eq!(outlined, leaves.len());
    // Refused: a word that is no state; a mass on a run without masses.
    let o = cairn(
        &["draw", "run", "-o", "bad", "--labels", "bright"],
        d.path(),
    );
    assert_eq!(o.code, 2);
    assert!(
        o.stderr.contains("'bright', which is no state"),
        "{}",
        o.stderr
    );
    assert!(!d.path().join("bad").exists());
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let o = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "nodist",
            "-q",
            "--labels",
            "1Msun",
        ],
        d.path(),
    );
    assert_eq!(o.code, 2);
    assert!(
        o.stderr
            .contains("--labels 1Msun labels the leaves by mass, but this run would have no masses (no distance, so no masses)"),
        "{}",
        o.stderr
    );
    assert!(!d.path().join("nodist").exists());
    let o = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "nodist",
            "-q",
            "--no-figure",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(&["draw", "nodist", "--labels", "1Msun"], d.path());
    assert_eq!(o.code, 2);
    assert!(
        o.stderr
            .contains("this run has no masses (no distance, so no masses)"),
        "{}",
        o.stderr
    );
    assert!(!d.path().join("nodist/overlay.png").exists());
    // States need a gas temperature: refused before the work.
    let o = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "notemp",
            "-q",
            "--distance",
            "410pc",
            "--labels",
            "bound",
        ],
        d.path(),
    );
    assert_eq!(o.code, 2);
    assert!(
        o.stderr.contains(
            "this run would have no states (the states need a gas temperature, --temperature)"
        ),
        "{}",
        o.stderr
    );
    assert!(!d.path().join("notemp").exists());
    // A state on a run without states, the same.
    let o = cairn(&["draw", "nodist", "--labels", "bound"], d.path());
    assert_eq!(o.code, 2);
    assert!(
        o.stderr
            .contains("no leaf of this run has one (no distance, so no masses)"),
        "{}",
        o.stderr
    );
    assert!(!d.path().join("nodist/overlay.png").exists());
    // unknown is a state every leaf of such a run has.
    let o = cairn(
        &["draw", "nodist", "-o", "unknown", "--labels", "unknown"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
}

/// The scale bar, its text and the frame (boxes), and the leaf outlines clipped to the frame.
type BarFrameOutlines = (
    svg_layout::Bounds,
    svg_layout::Bounds,
    svg_layout::Bounds,
    Vec<Vec<(f64, f64)>>,
);

/// The scale bar and its text, the frame and the leaf outlines (clipped to the frame) of a map
/// figure's SVG.
fn bar_frame_outlines(svg: &str) -> BarFrameOutlines {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let first_class = |n: &roxmltree::Node, c: &str| {
        n.attribute("class")
            .is_some_and(|x| x.split(' ').next() == Some(c))
    };
    let paths: Vec<roxmltree::Node> = doc
        .descendants()
        .filter(|n| n.has_tag_name("path") && n.attribute("d").is_some())
        .collect();
    let one = |pred: &dyn Fn(&roxmltree::Node) -> bool| {
        let n = paths.iter().find(|n| pred(n)).unwrap();
        svg_layout::bounds(n.attribute("d").unwrap())
    };
    let frame = one(&|n| first_class(n, "frame"));
    let bar = one(&|n| first_class(n, "scale-bar"));
    let text = one(&|n| {
        n.attribute("aria-label")
            .is_some_and(|l| l.ends_with(" pc"))
            && n.attribute("fill") != Some("none")
    });
    let outlines = paths
        .iter()
        .filter(|n| first_class(n, "leaf"))
        .flat_map(|n| svg_layout::clipped(&svg_layout::subpaths(n.attribute("d").unwrap()), frame))
        .collect();
    (bar, text, frame, outlines)
}

/// The scale bar takes the corner of the frame where no leaf's outline runs: on the 850 um
/// demo map the lower right corner holds leaves (the bar and its text stood on their outlines
/// there), and the bar moves beside the beam in the lower left, clear of every outline; in a
/// zoom into one large leaf, whose outline runs through the lower left only, it stands over
/// the leaf's inside, clear of the outline. Read from the SVG.
#[test]
fn the_scale_bar_takes_a_corner_clear_of_the_leaves() {
    let d = tempfile::tempdir().unwrap();
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let mut args = vec!["segment", map.to_str().unwrap(), "-o", "run"];
    args.extend_from_slice(&cli::DEMO_RUN);
    let o = cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    for width in ["1000", "1600"] {
        let out = format!("w{width}");
        let o = cairn(&["draw", "run", "-o", &out, "--width", width], d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
        let svg = std::fs::read_to_string(d.path().join(&out).join("overlay.svg")).unwrap();
        let (bar, text, frame, outlines) = bar_frame_outlines(&svg);
        assert!(!outlines.is_empty());
        for b in [bar, text] {
            assert!(
                svg_layout::distance(&outlines, b) > 2.0,
                "width {width}: the scale bar or its text at {b:?} on or next to an outline"
            );
        }
        // In the lower left, right of the beam.
        let beam = svg_layout::bounds(
            roxmltree::Document::parse(&svg)
                .unwrap()
                .descendants()
                .find(|n| n.attribute("class") == Some("beam"))
                .unwrap()
                .attribute("d")
                .unwrap(),
        );
        let mid = |b: svg_layout::Bounds| (0.5 * (b.0 + b.2), 0.5 * (b.1 + b.3));
        assert!(
            mid(bar).0 < mid(frame).0 && mid(bar).1 > mid(frame).1 && bar.0 > beam.2,
            "width {width}: bar {bar:?} beam {beam:?} frame {frame:?}"
        );
    }
    // A zoom into leaf 41, its outline crossing the lower left.
    let o = cairn(
        &[
            "draw",
            "run",
            "-o",
            "zoom",
            "--region",
            "152.8125,11.40625,3arcmin",
            "--width",
            "900",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let svg = std::fs::read_to_string(d.path().join("zoom/overlay.svg")).unwrap();
    let (bar, text, frame, outlines) = bar_frame_outlines(&svg);
    for b in [bar, text] {
        assert!(svg_layout::distance(&outlines, b) > 2.0, "{b:?}");
        assert!(
            b.0 >= frame.0 && b.2 <= frame.2 && b.1 >= frame.1 && b.3 <= frame.3,
            "{b:?} outside {frame:?}"
        );
    }
    // Not in the lower left, where the leaf's outline runs.
    assert!(
        bar.0 > frame.0 + 0.25 * (frame.2 - frame.0) || bar.3 < frame.1 + 0.5 * (frame.3 - frame.1),
        "bar {bar:?} frame {frame:?}"
    );
}

/// A sky centre in degrees with a size in pixels is read as a pixel centre, which lies off the
/// map: `segment` and `draw` refuse it with one sentence saying the centre is read as pixels
/// because of the size's unit, with the angular size to give instead (40 pixels of 6" are
/// 4': by hand), and write nothing; the angular size it names draws the region.
#[test]
fn a_sky_centre_with_a_size_in_pixels_is_refused() {
    let d = tempfile::tempdir().unwrap();
    write_map(d.path(), "eq.fits", 200, 100);
    let args = [
        "segment",
        "eq.fits",
        "-o",
        "run",
        "--min-area",
        "2px",
        "--region",
        "120.01,-30.005,40px",
        "-q",
    ];
    let o = cairn(&args, d.path());
    let says = "has its centre read as pixels because its size is in px, and pixel 120.01,-30.005 lies off the map of 200 x 100 pixels; for a sky centre in degrees give an angular size, such as 120.01,-30.005,4arcmin";
    cli::check_refused(&o, &args, "--region '120.01,-30.005,40px'", says);
    assert!(
        !d.path().join("run").exists(),
        "{:?}",
        cli::listing(d.path())
    );
    let o = cairn(
        &[
            "segment",
            "eq.fits",
            "-o",
            "run",
            "--min-area",
            "2px",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let args = ["draw", "run", "-o", "figs", "--region", "120.01,-30.005,40"];
    let o = cairn(&args, d.path());
    cli::check_refused(
        &o,
        &args,
        "--region '120.01,-30.005,40'",
        "because its size is a plain number, read as pixels",
    );
    assert!(
        !d.path().join("figs").exists(),
        "{:?}",
        cli::listing(d.path())
    );
    let o = cairn(
        &[
            "draw",
            "run",
            "-o",
            "figs",
            "--region",
            "120.01,-30.005,4arcmin",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(d.path().join("figs/overlay.png").is_file());
}

/// Colon sexagesimal centres are hours, minutes and seconds for the right ascension and
/// degrees, minutes and seconds for the declination: a region drawn around
/// 10:11:15,-31:37:30 is the one drawn around 152.8125,-31.625 (an hour is 15 degrees),
/// byte for byte.
#[test]
fn colon_sexagesimal_centres_equal_their_degrees() {
    let d = tempfile::tempdir().unwrap();
    let o = cairn(
        &[
            "synth",
            "-o",
            "s",
            "--size",
            "96",
            "--cores",
            "6",
            "--centre",
            "10:11:15,-31:37:30",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let o = cairn(
        &["segment", "s/synth.fits", "-o", "run", "--no-figure", "-q"],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    for (out, region) in [
        ("r1", "152.8125,-31.625,4arcmin"),
        ("r2", "10:11:15,-31:37:30,4arcmin"),
        ("r3", "10:11:15.0,-31:37:30.0,4arcmin"),
    ] {
        let o = cairn(
            &["draw", "run", "-o", out, "--region", region, "-q"],
            d.path(),
        );
        assert_eq!(o.code, 0, "{region}: {}", o.stderr);
    }
    let png = |out: &str| std::fs::read(d.path().join(out).join("overlay.png")).unwrap();
    assert_eq!(png("r1"), png("r2"));
    assert_eq!(png("r1"), png("r3"));
}

/// The invented galactic map of fixtures/draw/region_frames.json (tests/oracle/
/// draw_region_astropy.py), with the bumps of `write_map`.
fn write_galactic_fixture_map(dir: &Path) -> serde_json::Value {
    let v = common::fixture_json("draw/region_frames.json");
    let m = v["maps"]["galactic_tan"].clone();
    let p = write_map(
        dir,
        "bumps.fits",
        m["nx"].as_u64().unwrap() as usize,
        m["ny"].as_u64().unwrap() as usize,
    );
    let data = cairn::map::load(&p, &Default::default()).unwrap().data;
    let cards: Vec<String> = m["cards"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| format!("{:<80}", c.as_str().unwrap()))
        .collect();
    let mut h = Header::parse(&cards.concat());
    h.set("BUNIT", Value::Str("Jy/beam".into()), "");
    cairn::fits_write::write_image_f32(&dir.join("gal.fits"), data.view(), &h, false).unwrap();
    m
}

/// On a galactic map, a centre given in ICRS (`icrs:` first, in degrees or with colons in
/// hours) is converted to the map's frame: the region is the one drawn around the galactic
/// position astropy 8.0.2 gives for it (SkyCoord transform_to Galactic,
/// fixtures/draw/region_frames.json), byte for byte. Without the frame, colons on the
/// galactic longitude are refused, saying that they are hours of right ascension, and the
/// same numbers in degrees are refused as off the map with the way to give them in ICRS;
/// nothing is written.
#[test]
fn a_centre_in_another_frame_is_converted_to_the_maps() {
    let d = tempfile::tempdir().unwrap();
    let m = write_galactic_fixture_map(d.path());
    let case = m["cases"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["prefix"] == "icrs")
        .unwrap();
    let (ra, dec) = (common::num(&case["lon"]), common::num(&case["lat"]));
    // The fixture's ICRS position typed in hours: 107.6125 deg = 7h10m27.0s,
    // -18.4375 deg = -18d26m15s (by hand).
    assert_eq!((ra, dec), (107.6125, -18.4375));
    let (l, b) = (common::num(&case["map_lon"]), common::num(&case["map_lat"]));
    let o = cairn(
        &[
            "segment",
            "gal.fits",
            "-o",
            "run",
            "--min-area",
            "2px",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    for (out, region) in [
        ("own", format!("{l},{b},2arcmin")),
        ("icrs", format!("icrs:{ra},{dec},2arcmin")),
        ("hours", "ICRS:07:10:27.0,-18:26:15,2arcmin".to_string()),
    ] {
        let o = cairn(
            &["draw", "run", "-o", out, "--region", &region, "-q"],
            d.path(),
        );
        assert_eq!(o.code, 0, "{region}: {}", o.stderr);
    }
    let png = |out: &str| std::fs::read(d.path().join(out).join("overlay.png")).unwrap();
    assert_eq!(png("own"), png("icrs"));
    assert_eq!(png("own"), png("hours"));
    let args = [
        "draw",
        "run",
        "-o",
        "colons",
        "--region",
        "07:10:27.0,-18:26:15,2arcmin",
    ];
    let o = cairn(&args, d.path());
    cli::check_refused(
        &o,
        &args,
        "--region '07:10:27.0,-18:26:15,2arcmin'",
        "gives its longitude with colons, which are read as hours of right ascension, but the centre is in the galactic frame",
    );
    let args = [
        "draw",
        "run",
        "-o",
        "degrees",
        "--region",
        "107.6125,-18.4375,2arcmin",
    ];
    let o = cairn(&args, d.path());
    cli::check_refused(
        &o,
        &args,
        "the map's own frame (galactic l,b)",
        "as ICRS coordinates these fall on the map: give icrs:107.6125,-18.4375,2arcmin",
    );
    assert!(
        !d.path().join("colons").exists() && !d.path().join("degrees").exists(),
        "{:?}",
        cli::listing(d.path())
    );
}

/// On a flat strip (3000 x 60 pixels of 6", 21.8 pc x 0.44 pc at 250 pc) the scale bar is a
/// fifth of eight times the height, rounded down to 1, 2 or 5 of a power of ten (0.70 pc: 0.5
/// pc; a fifth of the width would give 2 pc, wider than the gaps between structures), and
/// it and its text, beside it, stand clear of every outline. Read from the SVG.
#[test]
fn a_flat_strip_gets_a_scale_bar_that_fits_between_its_structures() {
    let d = tempfile::tempdir().unwrap();
    let map = write_map(d.path(), "strip.fits", 3000, 60);
    let o = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "run",
            "--distance",
            "250pc",
            "--floor",
            "0.1",
            "--prominence",
            "0.05",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let svg = std::fs::read_to_string(d.path().join("run/overlay.svg")).unwrap();
    assert!(svg.contains("aria-label=\"0.5 pc\""), "no 0.5 pc bar");
    let (bar, text, frame, outlines) = bar_frame_outlines(&svg);
    assert!(!outlines.is_empty());
    for b in [bar, text] {
        assert!(b.0 >= frame.0 && b.2 <= frame.2, "{b:?} outside {frame:?}");
        assert!(
            svg_layout::distance(&outlines, b) > 0.0,
            "the scale bar or its text at {b:?} on an outline"
        );
    }
}

/// An invented 160 x 120 map of 6" pixels with a bump in the middle, its sky axes turned by
/// `crota2` degrees (CROTA2, FITS WCS paper II section 6.1) and with east to the right when
/// `mirrored` (CDELT1 positive).
fn write_turned_map(dir: &Path, name: &str, crota2: f64, mirrored: bool) -> PathBuf {
    let (nx, ny) = (160, 120);
    let mut h = Header::new();
    let mut set = |k: &str, v: Value| h.set(k, v, "");
    set("CTYPE1", Value::Str("RA---TAN".into()));
    set("CTYPE2", Value::Str("DEC--TAN".into()));
    set("CRPIX1", Value::Float(80.5));
    set("CRPIX2", Value::Float(60.5));
    set("CRVAL1", Value::Float(120.0));
    set("CRVAL2", Value::Float(-30.0));
    let sx = if mirrored { 6.0 } else { -6.0 };
    set("CDELT1", Value::Float(sx / 3600.0));
    set("CDELT2", Value::Float(6.0 / 3600.0));
    set("CROTA2", Value::Float(crota2));
    set("BUNIT", Value::Str("Jy/beam".into()));
    set("BMAJ", Value::Float(0.005));
    set("BMIN", Value::Float(0.005));
    let data = ndarray::Array2::from_shape_fn((ny, nx), |(y, x)| {
        let r2 = (x as f64 - 90.0).powi(2) + (y as f64 - 50.0).powi(2);
        ((-r2 / 50.0).exp() + 0.01 * (0.37 * (x * 7 + y * 3) as f64).sin()) as f32
    });
    let p = dir.join(name);
    cairn::fits_write::write_image_f32(&p, data.view(), &h, false).unwrap();
    p
}

/// A map whose north is not up, or whose east is to the right, carries north and east arrows
/// pointing where a step north and a step east at the map's centre go on the figure (by
/// cairn's WCS, itself checked against astropy 8.0.2 in tests/wcs_astropy.rs), within half a
/// degree; a map with north up and east to the left has none. Read from the SVG.
#[test]
fn turned_or_mirrored_maps_carry_north_and_east_arrows() {
    let d = tempfile::tempdir().unwrap();
    for (name, crota2, mirrored) in [
        ("plain.fits", 0.0, false),
        ("turned.fits", 30.0, false),
        ("steep.fits", -110.0, false),
        ("mirrored.fits", 0.0, true),
    ] {
        let path = write_turned_map(d.path(), name, crota2, mirrored);
        let out = format!("run-{name}");
        let o = cairn(
            &[
                "segment",
                path.to_str().unwrap(),
                "-o",
                &out,
                "--floor",
                "0.3",
                "--prominence",
                "0.1",
                "-q",
            ],
            d.path(),
        );
        assert_eq!(o.code, 0, "{name}: {}", o.stderr);
        let svg = std::fs::read_to_string(d.path().join(&out).join("overlay.svg")).unwrap();
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let arrows = doc
            .descendants()
            .find(|n| n.attribute("class") == Some("compass"));
        if crota2 == 0.0 && !mirrored {
            assert!(arrows.is_none(), "{name}: arrows on a map with north up");
            continue;
        }
        let arrows = svg_layout::subpaths(arrows.expect(name).attribute("d").unwrap());
        assert_eq!(arrows.len(), 2, "{name}");
        // The figure's directions (y down) against the WCS's at the map's centre.
        let m = cairn::map::load(&path, &cairn::map::LoadOptions::default()).unwrap();
        let w = m.wcs.as_ref().unwrap();
        let (cx, cy) = (79.5, 59.5);
        let (lon, lat) = w.pixel_to_sky(cx, cy).unwrap();
        let step = 1.0 / 60.0;
        let towards = |lon2: f64, lat2: f64| {
            let (x, y) = w.sky_to_pixel(lon2, lat2).unwrap();
            (x - cx).atan2(-(y - cy)).to_degrees()
        };
        let expect = [
            towards(lon, lat + step),
            towards(lon + step / lat.to_radians().cos(), lat),
        ];
        for (arrow, want) in arrows.iter().zip(expect) {
            let (a, b) = (arrow[0], arrow[arrow.len() - 1]);
            let got = (b.0 - a.0).atan2(b.1 - a.1).to_degrees();
            let diff = (got - want + 540.0).rem_euclid(360.0) - 180.0;
            assert!(
                diff.abs() < 0.5,
                "{name}: arrow at {got} deg, the sky's at {want}"
            );
        }
        assert_eq!(
            svg.matches("class=\"compass-letter\"").count(),
            2,
            "{name}: N and E"
        );
    }
}

/// On a zoom the legend lists the states of the leaves that have a pixel in the shown part
/// only: a corner of the 850 um demo map with no leaf has no state entries, and a zoom into
/// leaf 41 (unbound) alone lists the unbound state only, where the whole map lists three.
#[test]
fn a_zoom_lists_the_states_it_shows() {
    let d = tempfile::tempdir().unwrap();
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let mut args = vec!["segment", map.to_str().unwrap(), "-o", "run"];
    args.extend_from_slice(&cli::DEMO_RUN);
    let o = cairn(&args, d.path());
    assert_eq!(o.code, 0, "{}", o.stderr);
    let states = |out: &str, region: Option<&str>| -> Vec<String> {
        let mut a = vec!["draw", "run", "-o", out, "-q"];
        if let Some(r) = region {
            a.extend_from_slice(&["--region", r]);
        }
        let o = cairn(&a, d.path());
        assert_eq!(o.code, 0, "{}", o.stderr);
        let svg = std::fs::read_to_string(d.path().join(out).join("overlay.svg")).unwrap();
        legend_entries(&svg)
            .iter()
            .map(|e| e.split(':').next().unwrap().to_string())
            .collect()
    };
    assert_eq!(states("whole", None), ["bound", "marginal", "unbound"]);
    assert!(states("empty", Some("25,25,50px")).is_empty());
    assert_eq!(
        states("one", Some("152.8125,11.40625,3arcmin")),
        ["unbound"]
    );
}

/// With `--branches`, leaf labels and the scale bar keep clear of the branches' outlines where
/// there is room (read back from the SVG): on the column demo map the scale bar crosses no
/// branch's line, and labels (beside their leaves or on leader lines) touch one only where no
/// place clear of every line was found (at most a tenth of them on this map of 47 leaves,
/// whose branches fill much of its upper half).
#[test]
fn labels_and_the_scale_bar_keep_clear_of_branch_outlines() {
    let d = tempfile::tempdir().unwrap();
    let run = demo_run(d.path(), "demo", &[]);
    let o = cairn(
        &[
            "draw",
            run.to_str().unwrap(),
            "-o",
            "figs",
            "--branches",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    let svg = std::fs::read_to_string(d.path().join("figs/overlay.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    let mut branch_lines = Vec::new();
    let mut bar = None;
    for n in doc.descendants().filter(|n| n.has_tag_name("path")) {
        match n.attribute("class") {
            Some("branch") => {
                for mut r in svg_layout::subpaths(n.attribute("d").unwrap()) {
                    r.push(r[0]);
                    branch_lines.push(r);
                }
            }
            Some("scale-bar") => bar = Some(svg_layout::bounds(n.attribute("d").unwrap())),
            _ => {}
        }
    }
    assert!(!branch_lines.is_empty(), "branches are drawn");
    let bar = bar.expect("a scale bar (the run has a distance)");
    assert!(
        svg_layout::distance(&branch_lines, bar) > 0.0,
        "the scale bar {bar:?} crosses a branch's outline"
    );
    let l = svg_layout::leaf_layout(&svg);
    // Labels beside their leaves and those out on leader lines alike.
    let touching = l
        .labels
        .values()
        .filter(|b| svg_layout::distance(&branch_lines, **b) < 0.5)
        .count();
    assert!(
        touching * 10 <= l.labels.len(),
        "{touching} of {} labels touch a branch's outline",
        l.labels.len()
    );
}

/// The note that leaf ids were set smaller comes only with a smaller size: at resolutions
/// where the usual size in points, read back from figure pixels, is not exactly 7.65, a map
/// whose every leaf has room at the usual size gets no such note; a narrow figure of the same
/// map, too crowded for some ids at the usual size, says the size it took.
#[test]
fn the_smaller_label_note_comes_only_with_a_smaller_size() {
    let d = tempfile::tempdir().unwrap();
    let run = demo_run(d.path(), "demo", &[]);
    for dpi in ["149", "298", "300"] {
        let out = format!("f{dpi}");
        let o = cairn(
            &["draw", run.to_str().unwrap(), "-o", &out, "--dpi", dpi],
            d.path(),
        );
        assert_eq!(o.code, 0, "{}", o.stderr);
        assert!(
            !o.stdout.contains("leaf ids set at"),
            "{dpi} dpi: {}",
            o.stdout
        );
    }
    let o = cairn(
        &[
            "draw",
            run.to_str().unwrap(),
            "-o",
            "narrow",
            "--width",
            "1000",
        ],
        d.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stdout.contains("figure: leaf ids set at ")
            && o.stdout.contains(" pt rather than 7.65 pt"),
        "{}",
        o.stdout
    );
}

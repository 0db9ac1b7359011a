//! The catalogue of grown leaves (`structures-grown.*`, written with `--grow-leaves`): its
//! areas, sums and centroids against a hand calculation over the written grown label plane, and
//! its relation to the main catalogue (a grown footprint contains the leaf's own).

mod common;
#[allow(dead_code)]
#[path = "common/segment_fixture.rs"]
mod segment_fixture;

use std::collections::HashMap;
use std::path::Path;

use cairn::header::{Header, Value};
use cairn::hierarchy::Connectivity;
use cairn::inspect::NoiseChoice;
use cairn::map::{self, LoadOptions};
use cairn::segment::{self, Area, Level, SegmentOptions, names};
use common::{assert_close, field as f, fixture_path, read_csv};

/// A label plane written by a run (-1 for none), through CFITSIO.
fn read_labels(path: &Path) -> ndarray::Array2<i64> {
    let mut f = fitsio::FitsFile::open(path).unwrap();
    let hdu = f.primary_hdu().unwrap();
    let (ny, nx): (i64, i64) = (
        hdu.read_key(&mut f, "NAXIS2").unwrap(),
        hdu.read_key(&mut f, "NAXIS1").unwrap(),
    );
    let v: Vec<i32> = hdu.read_image(&mut f).unwrap();
    ndarray::Array2::from_shape_vec((ny as usize, nx as usize), v)
        .unwrap()
        .mapv(i64::from)
}

/// An invented map of 7 rows and 12 columns: two peaks (9 and 8) on one pedestal, meeting at a
/// saddle, in a ring of zeros below the floor.
fn hand_map() -> ndarray::Array2<f32> {
    let rows: [[f32; 12]; 7] = [
        [0., 0., 0., 0., 0., 0., 0., 0., 0., 0., 0., 0.],
        [0., 1., 2., 2., 1., 0., 0., 1., 1., 1., 0., 0.],
        [0., 2., 6., 7., 3., 2., 2., 3., 5., 3., 1., 0.],
        [0., 2., 7., 9., 4., 2., 2., 4., 8., 4., 1., 0.],
        [0., 1., 3., 4., 3., 2., 2., 3., 4., 3., 1., 0.],
        [0., 0., 1., 1., 1., 1., 1., 1., 1., 1., 0., 0.],
        [0., 0., 0., 0., 0., 0., 0., 0., 0., 0., 0., 0.],
    ];
    ndarray::Array2::from_shape_fn((7, 12), |(y, x)| rows[y][x])
}

fn hand_options(out: &Path, grow: bool) -> SegmentOptions {
    SegmentOptions {
        floor: Some(Level::Value(0.5)),
        prominence: Some(Level::Value(2.0)),
        min_area: Some(Area::Pixels(1.0)),
        connectivity: Connectivity::Eight,
        grow_leaves: grow,
        leaves_only: false,
        noise: NoiseChoice::Value(0.1),
        output: out.to_path_buf(),
        force: true,
        command_line: vec![],
        physics: Default::default(),
        other_inputs: Vec::new(),
        threshold_texts: Default::default(),
        figure: None,
        label_choice: Default::default(),
    }
}

/// Runs `segment` on the hand-made map (no WCS; BUNIT cm-2, no distance, so no masses) in `dir`, into `dir/run`.
fn run_hand_map(dir: &Path, grow: bool) -> std::path::PathBuf {
    let path = dir.join("hand.fits");
    let mut h = Header::new();
    h.set("BUNIT", Value::Str("cm-2".into()), "");
    cairn::fits_write::write_image_f32(&path, hand_map().view(), &h, false).unwrap();
    let m = map::load(&path, &LoadOptions::default()).unwrap();
    let out = dir.join("run");
    segment::run(&m, &hand_options(&out, grow), &|_, _| {}).unwrap();
    out
}

/// Hand calculation: for each leaf, the number of pixels of the written grown label plane that
/// carry its id, the sum of the map over them and the value-weighted centroid
/// (sum v x / sum v, sum v y / sum v), by plain loops over the plane and the map, against the
/// grown catalogue's `area_px`, `sum`, `x` and `y`.
#[test]
fn grown_rows_are_the_sums_over_the_written_grown_plane() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_hand_map(dir.path(), true);
    let map = hand_map();
    let grown = read_labels(&out.join(names::GROWN));
    let rows = read_csv(&out.join(names::GROWN_CSV));
    let main = read_csv(&out.join(names::CSV));
    // By hand: the peaks 9 and 8 meet at the level 2 (columns 5 and 6), 7 and 6 above it, more
    // than the prominence 2, so both are leaves of one root; the grown catalogue has one row
    // for each, with their ids.
    let leaf_ids: Vec<String> = main
        .iter()
        .filter(|r| r["kind"] == "leaf")
        .map(|r| r["id"].clone())
        .collect();
    assert_eq!(leaf_ids.len(), 2);
    assert_eq!(
        rows.iter().map(|r| r["id"].clone()).collect::<Vec<_>>(),
        leaf_ids
    );
    // Every pixel above the floor (0.5) is connected to a leaf, so every one is grown into one.
    for ((y, x), &v) in map.indexed_iter() {
        assert_eq!(grown[(y, x)] >= 0, v >= 0.5, "pixel ({x}, {y})");
    }
    for row in &rows {
        let id: i64 = row["id"].parse().unwrap();
        let (mut n, mut s, mut sx, mut sy) = (0u64, 0.0f64, 0.0f64, 0.0f64);
        for ((y, x), &l) in grown.indexed_iter() {
            if l == id {
                let v = map[(y, x)] as f64;
                n += 1;
                s += v;
                sx += v * x as f64;
                sy += v * y as f64;
            }
        }
        assert!(n > 0, "leaf {id} holds pixels of the grown plane");
        assert_eq!(f(row, "area_px"), n as f64, "leaf {id} area");
        // Sums of small integers are exact in doubles.
        assert_eq!(f(row, "sum"), s, "leaf {id} sum");
        assert_close(f(row, "x"), sx / s, 1e-14, 1e-14, &format!("leaf {id} x"));
        assert_close(f(row, "y"), sy / s, 1e-14, 1e-14, &format!("leaf {id} y"));
        // The floor is the reference level of a grown footprint.
        assert_eq!(f(row, "merge_level"), 0.5, "leaf {id} merge_level");
        assert_eq!(f(row, "excess_sum"), s - 0.5 * n as f64, "leaf {id} excess");
        assert_eq!(row["kind"], "leaf");
    }
}

/// On the stored run's map (positive wherever it is defined): each leaf's grown footprint holds
/// its own pixels, so its grown area, sum and masses are at least its own; leaves without a
/// parent already reach the floor, and their rows agree with the main catalogue's.
#[test]
fn a_grown_footprint_holds_the_leafs_own() {
    let m = map::load(&fixture_path("segment/map.fits"), &LoadOptions::default()).unwrap();
    assert!(
        m.data.iter().all(|v| v.is_nan() || *v > 0.0),
        "a positive map"
    );
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    segment::run(&m, &segment_fixture::fixture_options(&out), &|_, _| {}).unwrap();
    let own: HashMap<String, HashMap<String, String>> = read_csv(&out.join(names::CSV))
        .into_iter()
        .filter(|r| r["kind"] == "leaf")
        .map(|r| (r["id"].clone(), r))
        .collect();
    let grown = read_csv(&out.join(names::GROWN_CSV));
    assert_eq!(grown.len(), own.len(), "one row per leaf");
    let labels = read_labels(&out.join(names::LABELS));
    let plane = read_labels(&out.join(names::GROWN));
    let floor = 3.2e21;
    let mut larger = 0;
    for g in &grown {
        let id = &g["id"];
        let o = &own[id];
        for k in ["kind", "parent", "n_children", "depth", "peak_x", "peak_y"] {
            assert_eq!(g[k], o[k], "leaf {id} {k}");
        }
        let n: i64 = id.parse().unwrap();
        // The leaf's own pixels (its label in labels.fits) keep its id in the grown plane.
        assert!(
            labels
                .iter()
                .zip(plane.iter())
                .all(|(&l, &p)| l != n || p == n),
            "leaf {id}'s own pixels are in its grown footprint"
        );
        assert!(f(g, "area_px") >= f(o, "area_px"), "leaf {id} area");
        assert!(f(g, "sum") >= f(o, "sum"), "leaf {id} sum");
        assert!(f(g, "mass") >= f(o, "mass"), "leaf {id} mass");
        assert_eq!(f(g, "merge_level"), floor, "leaf {id} merge_level");
        assert_close(
            f(g, "excess_sum"),
            f(g, "sum") - f(g, "area_px") * floor,
            1e-12,
            0.0,
            &format!("leaf {id} excess_sum"),
        );
        if o["parent"] == "-1" {
            for k in [
                "area_px",
                "sum",
                "x",
                "y",
                "sigma_major_px",
                "fwhm_major",
                "mass",
                "mass_excess",
                "alpha_vir",
            ] {
                assert_close(f(g, k), f(o, k), 1e-12, 0.0, &format!("leaf {id} {k}"));
            }
        } else if f(g, "area_px") > f(o, "area_px") {
            larger += 1;
        }
    }
    assert!(larger > 0, "some leaf with a parent grows");
}

/// Without `--grow-leaves` no grown plane and no grown catalogue are written.
#[test]
fn no_grown_catalogue_without_grow_leaves() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_hand_map(dir.path(), false);
    assert!(out.join(names::CSV).is_file());
    for name in [
        names::GROWN,
        names::GROWN_CSV,
        names::GROWN_FITS_TABLE,
        names::GROWN_VOTABLE,
    ] {
        assert!(
            !out.join(name).exists(),
            "{name} written without --grow-leaves"
        );
    }
}

/// The grown catalogue's FITS table and VOTable hold the CSV's rows, with the floor as the
/// reference level said in their notes.
#[test]
fn grown_catalogue_in_three_forms() {
    let dir = tempfile::tempdir().unwrap();
    let out = run_hand_map(dir.path(), true);
    let csv = std::fs::read_to_string(out.join(names::GROWN_CSV)).unwrap();
    assert!(csv.contains("grown down to the floor") && csv.contains("taken above the floor"));
    let vot = std::fs::read_to_string(out.join(names::GROWN_VOTABLE)).unwrap();
    assert!(
        vot.contains("taken above the floor"),
        "the notes in the VOTable"
    );
    assert_eq!(vot.matches("<TR>").count(), 2, "two rows in the VOTable");
    let mut fits = fitsio::FitsFile::open(out.join(names::GROWN_FITS_TABLE)).unwrap();
    let hdu = fits.hdu(1).unwrap();
    let ids: Vec<i64> = hdu.read_col(&mut fits, "id").unwrap();
    let csv_ids: Vec<i64> = read_csv(&out.join(names::GROWN_CSV))
        .iter()
        .map(|r| r["id"].parse().unwrap())
        .collect();
    assert_eq!(ids, csv_ids);
    let extname: String = hdu.read_key(&mut fits, "EXTNAME").unwrap();
    assert_eq!(extname, "GROWN_LEAVES");
}

/// `draw` reads a run made with `--grow-leaves` as any other, and drawing into its folder again
/// leaves the grown plane and the grown catalogue as they were.
#[test]
fn draw_takes_a_run_with_grown_leaves() {
    let d = tempfile::tempdir().unwrap();
    let cairn = |args: &[&str]| {
        let out = std::process::Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args(args)
            .current_dir(d.path())
            .output()
            .unwrap();
        (
            out.status.code().unwrap_or(-1),
            String::from_utf8_lossy(&out.stderr).into_owned(),
        )
    };
    let m = fixture_path("segment/map.fits");
    let (code, stderr) = cairn(&[
        "segment",
        m.to_str().unwrap(),
        "-o",
        "run",
        "--floor",
        "3.2e21",
        "--noise",
        "1e20",
        "--grow-leaves",
        "--quiet",
    ]);
    assert_eq!(code, 0, "{stderr}");
    let grown = [
        names::GROWN,
        names::GROWN_CSV,
        names::GROWN_FITS_TABLE,
        names::GROWN_VOTABLE,
    ];
    let before: Vec<Vec<u8>> = grown
        .iter()
        .map(|n| std::fs::read(d.path().join("run").join(n)).unwrap())
        .collect();
    let (code, stderr) = cairn(&["draw", "run", "--stretch", "sqrt", "--force", "--quiet"]);
    assert_eq!(code, 0, "{stderr}");
    let (code, stderr) = cairn(&["draw", "run", "-o", "figures", "--quiet"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(d.path().join("figures/overlay.png").is_file());
    for (n, b) in grown.iter().zip(&before) {
        assert_eq!(
            &std::fs::read(d.path().join("run").join(n)).unwrap(),
            b,
            "{n} left as it was"
        );
    }
}

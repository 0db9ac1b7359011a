//! `cairn segment` from the command line: outputs, empty results and bad thresholds. Each
//! refusal is one sentence, exit code 2, no panic and no output written.

use std::path::{Path, PathBuf};
use std::process::Command;

#[path = "common/catalogue_files.rs"]
mod catalogue_files;

fn cairn(args: &[&str], dir: &Path) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_cairn"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// The summary's first line, "N structures in T trees: L leaves (A of them top-level), B
/// branches, R roots; S s": the counts add up (a top-level leaf is a tree of its own, counted
/// among the leaves, as in the catalogue's kind column) and equal the run record's.
fn summary_adds_up(line: &str, result: &serde_json::Value) {
    let numbers: Vec<u64> = line
        .split(|c: char| !c.is_ascii_digit() && c != '.')
        .filter_map(|w| w.parse().ok())
        .collect();
    let (n, t, l) = (numbers[0], numbers[1], numbers[2]);
    let (a, b, r) = if line.contains("of them top-level") {
        (numbers[3], numbers[4], numbers[5])
    } else if line.contains("top-level)") {
        (l, numbers[3], numbers[4])
    } else {
        (0, numbers[3], numbers[4])
    };
    assert_eq!(n, l + b + r, "{line}");
    assert_eq!(t, a + r, "{line}");
    assert_eq!(n, result["structures"].as_u64().unwrap(), "{line}");
    assert_eq!(t, result["trees"].as_u64().unwrap(), "{line}");
    assert_eq!(l, result["leaves"].as_u64().unwrap(), "{line}");
    assert_eq!(b, result["branches"].as_u64().unwrap(), "{line}");
    assert_eq!(r, result["roots"].as_u64().unwrap(), "{line}");
}

fn fixture_map() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("fixtures/segment/map.fits")
}

/// `cairn segment demo-maps/MAP -o OUT --no-figure -q EXTRA...` in `dir`.
fn segment_demo(dir: &Path, map: &str, out: &str, extra: &[&str]) -> (i32, String, String) {
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("demo-maps")
        .join(map);
    let mut args = vec![
        "segment",
        map.to_str().unwrap(),
        "-o",
        out,
        "--no-figure",
        "-q",
    ];
    args.extend_from_slice(extra);
    cairn(&args, dir)
}

fn refused(dir: &Path, args: &[&str], says: &str) {
    let before: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    let (code, stdout, stderr) = cairn(args, dir);
    assert_eq!(code, 2, "{args:?}: {stderr}");
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert_eq!(
        stderr.trim_end().lines().count(),
        1,
        "one sentence: {stderr}"
    );
    assert!(
        stderr.contains(says),
        "{args:?} should say '{says}': {stderr}"
    );
    assert!(stdout.is_empty(), "{stdout}");
    let after: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(before, after, "{args:?}: nothing written");
}

#[test]
fn writes_every_output_and_refuses_to_overwrite_without_force() {
    let d = tempfile::tempdir().unwrap();
    let map = fixture_map();
    let m = map.to_str().unwrap();
    let (code, stdout, stderr) = cairn(
        &[
            "segment",
            m,
            "-o",
            "run",
            "--floor",
            "3.2e21",
            "--prominence",
            "6e20",
            "--noise",
            "1e20",
            "--grow-leaves",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stdout.contains("leaves") && stdout.contains("branches") && stdout.contains("roots"),
        "{stdout}"
    );
    for name in [
        "structures.csv",
        "structures.fits",
        "structures.vot",
        "labels.fits",
        "leaves-grown.fits",
        "structures-grown.csv",
        "structures-grown.fits",
        "structures-grown.vot",
        "hierarchy.json",
        "hierarchy.dot",
        "run.json",
    ] {
        assert!(d.path().join("run").join(name).is_file(), "{name} written");
    }
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("run/run.json")).unwrap())
            .unwrap();
    assert_eq!(run["input"]["sha256"].as_str().unwrap().len(), 64);
    assert_eq!(run["parameters"]["floor"]["unit"], "cm-2");
    assert!(run["threads"].as_u64().unwrap() >= 1);
    summary_adds_up(stdout.lines().next().unwrap(), &run["result"]);
    let before = std::fs::read(d.path().join("run/structures.csv")).unwrap();
    let (code, _, stderr) = cairn(&["segment", m, "-o", "run", "--floor", "4e21"], d.path());
    assert_eq!(code, 2);
    assert!(stderr.contains("--force"), "{stderr}");
    assert_eq!(
        std::fs::read(d.path().join("run/structures.csv")).unwrap(),
        before,
        "untouched without --force"
    );
    let (code, _, stderr) = cairn(
        &[
            "segment",
            m,
            "-o",
            "run",
            "--floor",
            "4e21",
            "--noise",
            "1e20",
            "--force",
            "--leaves-only",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    let csv = std::fs::read_to_string(d.path().join("run/structures.csv")).unwrap();
    assert!(
        !csv.contains(",branch,") && !csv.contains(",root,"),
        "leaves only"
    );
    // Floors where some leaves, and then every leaf, stand alone as trees of their own.
    for (floor, every_leaf_alone) in [("4e21", false), ("1.2e22", true)] {
        let args = [
            "segment", m, "-o", "run", "--floor", floor, "--noise", "1e20",
        ];
        let (code, stdout, stderr) = cairn(&[&args[..], &["--force"]].concat(), d.path());
        assert_eq!(code, 0, "{stderr}");
        let first = stdout.lines().next().unwrap();
        assert_eq!(
            first.contains("(all top-level)"),
            every_leaf_alone,
            "{first}"
        );
        let run: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(d.path().join("run/run.json")).unwrap())
                .unwrap();
        summary_adds_up(first, &run["result"]);
    }
}

#[test]
fn thresholds_that_leave_nothing_give_valid_empty_outputs() {
    let d = tempfile::tempdir().unwrap();
    let map = fixture_map();
    let (code, stdout, stderr) = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "empty",
            "--floor",
            "3e21",
            "--prominence",
            "1e30",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stdout.contains("0 leaves") && stdout.contains("no structure passes"),
        "{stdout}"
    );
    let csv = std::fs::read_to_string(d.path().join("empty/structures.csv")).unwrap();
    let data_lines: Vec<_> = csv.lines().filter(|l| !l.starts_with('#')).collect();
    assert_eq!(data_lines.len(), 1, "header row only: {csv}");
    let tree: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(d.path().join("empty/hierarchy.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(tree["structures"].as_array().unwrap().len(), 0);
}

#[test]
fn bad_thresholds_and_output_folders_are_refused() {
    let d = tempfile::tempdir().unwrap();
    let map = fixture_map();
    let m = map.to_str().unwrap();
    refused(
        d.path(),
        &["segment", m, "-o", "a", "--floor", "1e30"],
        "--floor 1.0000e30 lies above the highest value",
    );
    // Levels beyond the range of double-precision numbers (a stated property: the largest
    // is about 1.8e308) in the map's unit, which no catalogue could record.
    refused(
        d.path(),
        &["segment", m, "-o", "a", "--floor", "1e300sigma"],
        "--floor 1e300sigma is beyond the range of numbers in the map's unit (inf)",
    );
    refused(
        d.path(),
        &["segment", m, "-o", "a", "--prominence", "1e307sigma"],
        "--prominence 1e307sigma is beyond the range of numbers",
    );
    // A floor in noise units, and the default one (3 sigma above the background), say which
    // noise they used.
    refused(
        d.path(),
        &[
            "segment", m, "-o", "a", "--floor", "5sigma", "--noise", "1e30",
        ],
        "--floor 5sigma (5.0000e30: 5 times the noise 1.0000e30 above the background ",
    );
    refused(
        d.path(),
        &["segment", m, "-o", "a", "--noise", "1e30"],
        "the default floor, 3 sigma above the background",
    );
    refused(
        d.path(),
        &[
            "segment",
            m,
            "-o",
            "a",
            "--prominence",
            "-3sigma",
            "--noise",
            "1e20",
        ],
        "must not be negative",
    );
    refused(
        d.path(),
        &["segment", m, "-o", "a", "--min-area", "99999999px"],
        "larger than the whole map",
    );
    refused(
        d.path(),
        &["segment", m, "-o", "a", "--floor", "high"],
        "--floor 'high' is not understood",
    );
    refused(
        d.path(),
        &["segment", m, "-o", "a", "--min-area", "3parsecs"],
        "--min-area '3parsecs'",
    );
    refused(
        d.path(),
        &["segment", m, "-o", "a", "--connectivity", "6"],
        "give 4 or 8",
    );
    std::fs::write(d.path().join("afile"), b"x").unwrap();
    refused(d.path(), &["segment", m, "-o", "afile"], "is not a folder");
    refused(
        d.path(),
        &["segment", m, "-o", "afile/sub"],
        "cannot be created",
    );
}

/// A map kept in the output folder under an output's name, or a temperature map there, is an
/// input: the run refuses to replace it even with `--force`, and the file is unchanged.
#[test]
fn inputs_are_never_replaced_by_outputs() {
    let d = tempfile::tempdir().unwrap();
    std::fs::create_dir(d.path().join("run")).unwrap();
    let original = std::fs::read(fixture_map()).unwrap();
    std::fs::write(d.path().join("run/labels.fits"), &original).unwrap();
    refused(
        d.path(),
        &[
            "segment",
            "run/labels.fits",
            "-o",
            "run",
            "--floor",
            "4e21",
            "--force",
            "--no-figure",
            "--quiet",
        ],
        "is an input of this run",
    );
    assert_eq!(
        std::fs::read(d.path().join("run/labels.fits")).unwrap(),
        original
    );
    let m = fixture_map();
    refused(
        d.path(),
        &[
            "segment",
            m.to_str().unwrap(),
            "-o",
            "run",
            "--floor",
            "4e21",
            "--temperature-map",
            "run/labels.fits",
            "--force",
            "--quiet",
        ],
        "is an input of this run",
    );
    assert_eq!(
        std::fs::read(d.path().join("run/labels.fits")).unwrap(),
        original
    );
    // A name this run does not write but would remove as an earlier run's file with --force.
    std::fs::write(d.path().join("run/leaves-grown.fits"), &original).unwrap();
    refused(
        d.path(),
        &[
            "segment",
            "run/leaves-grown.fits",
            "-o",
            "run",
            "--floor",
            "4e21",
            "--force",
            "--quiet",
        ],
        "is an input of this run",
    );
    assert_eq!(
        std::fs::read(d.path().join("run/leaves-grown.fits")).unwrap(),
        original
    );
    // The record of the earlier run whose thresholds this run takes, given as its folder or
    // as the file itself, and a velocity-dispersion map kept in the folder.
    let (code, _, stderr) = cairn(
        &[
            "segment",
            m.to_str().unwrap(),
            "-o",
            "t2",
            "--floor",
            "4e21",
            "--no-figure",
            "--quiet",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    let record = std::fs::read(d.path().join("t2/run.json")).unwrap();
    for from in ["t2", "t2/run.json"] {
        refused(
            d.path(),
            &[
                "segment",
                m.to_str().unwrap(),
                "-o",
                "t2",
                "--thresholds-from",
                from,
                "--force",
                "--no-figure",
                "--quiet",
            ],
            "t2/run.json: is an input of this run and would be replaced by its output run.json",
        );
        assert_eq!(std::fs::read(d.path().join("t2/run.json")).unwrap(), record);
    }
    refused(
        d.path(),
        &[
            "segment",
            m.to_str().unwrap(),
            "-o",
            "run",
            "--floor",
            "4e21",
            "--sigma-nt-map",
            "run/leaves-grown.fits",
            "--force",
            "--quiet",
        ],
        "is an input of this run",
    );
    assert_eq!(
        std::fs::read(d.path().join("run/leaves-grown.fits")).unwrap(),
        original
    );
}

/// With `--force`, a run replaces every file of an earlier run in the folder: figures and grown
/// leaves that this run does not make are removed, so the folder never mixes two runs.
#[test]
fn force_leaves_no_file_of_the_earlier_run() {
    let d = tempfile::tempdir().unwrap();
    let m = fixture_map();
    let m = m.to_str().unwrap();
    let first = [
        "segment",
        m,
        "-o",
        "run",
        "--floor",
        "4e21",
        "--grow-leaves",
        "--quiet",
    ];
    let (code, _, stderr) = cairn(&first, d.path());
    assert_eq!(code, 0, "{stderr}");
    for name in [
        "overlay.png",
        "overlay.pdf",
        "tree.svg",
        "tree.pdf",
        "leaves-grown.fits",
        "structures-grown.csv",
        "structures-grown.fits",
        "structures-grown.vot",
    ] {
        assert!(d.path().join("run").join(name).is_file(), "{name}");
    }
    let second = [
        "segment",
        m,
        "-o",
        "run",
        "--floor",
        "5e21",
        "--no-figure",
        "--force",
        "--quiet",
    ];
    let (code, _, stderr) = cairn(&second, d.path());
    assert_eq!(code, 0, "{stderr}");
    let mut left: Vec<String> = std::fs::read_dir(d.path().join("run"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    left.sort();
    assert_eq!(
        left,
        [
            "hierarchy.dot",
            "hierarchy.json",
            "labels.fits",
            "run.json",
            "structures.csv",
            "structures.fits",
            "structures.vot"
        ]
    );
}

/// A failed run removes every folder level it created, not only the last.
#[test]
fn a_failed_run_removes_the_folders_it_made() {
    let d = tempfile::tempdir().unwrap();
    let m = fixture_map();
    refused(
        d.path(),
        &[
            "segment",
            m.to_str().unwrap(),
            "-o",
            "deep/a/b/c",
            "--floor",
            "1e30",
            "--quiet",
        ],
        "--floor",
    );
    assert!(!d.path().join("deep").exists());
}

/// A folder standing where an output file goes is refused before any work, even with
/// `--force`, rather than failing half-way through putting the files in place.
#[test]
fn a_folder_in_place_of_an_output_is_refused_up_front() {
    let d = tempfile::tempdir().unwrap();
    std::fs::create_dir_all(d.path().join("run/tree.svg")).unwrap();
    let m = fixture_map();
    refused(
        d.path(),
        &[
            "segment",
            m.to_str().unwrap(),
            "-o",
            "run",
            "--floor",
            "4e21",
            "--force",
            "--quiet",
        ],
        "is a folder where an output file goes",
    );
    assert!(!d.path().join("run/structures.csv").exists());
}

/// An interrupted run (SIGTERM, as from `kill` or a batch system's time limit) leaves either
/// nothing or the whole run, never temporary files or a half-filled folder. The signal is
/// sent at several moments, so that some land mid-run; every outcome must be one of the two.
#[cfg(unix)]
#[test]
fn an_interrupted_run_leaves_no_partial_output() {
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let mut interrupted = 0;
    for delay_ms in [10u64, 20, 40, 60, 90, 120, 160, 200, 260] {
        let d = tempfile::tempdir().unwrap();
        let mut child = Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args(["segment", map.to_str().unwrap(), "-o", "run", "--quiet"])
            .current_dir(d.path())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap();
        std::thread::sleep(std::time::Duration::from_millis(delay_ms));
        let _ = Command::new("kill")
            .args(["-TERM", &child.id().to_string()])
            .status();
        let status = child.wait().unwrap();
        let run = d.path().join("run");
        // The outcome: no folder, or a folder with the whole run and nothing else (whether
        // the signal came too late to stop it or after it had finished). A signal that lands
        // before the handler is installed ends the process at once, with no folder either.
        let files = std::fs::read_dir(&run).map(|r| r.count()).unwrap_or(0);
        assert!(
            !run.exists() || files == 13,
            "signal at {delay_ms} ms ({status:?}): {files} files left"
        );
        // Ended by the signal itself (after the clean-up), as its default action would.
        use std::os::unix::process::ExitStatusExt;
        if status.signal() == Some(15) && !run.exists() {
            interrupted += 1;
        }
    }
    assert!(interrupted > 0, "no signal landed mid-run");
}

/// A run started with SIGHUP ignored (`nohup`, so that it outlives its terminal) keeps it
/// ignored: a hang-up does not stop it and it writes the whole run.
#[cfg(unix)]
#[test]
fn a_run_under_nohup_outlives_a_hang_up() {
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let d = tempfile::tempdir().unwrap();
    // nohup sets SIGHUP to be ignored and replaces itself by cairn (same process).
    let mut child = Command::new("nohup")
        .arg(env!("CARGO_BIN_EXE_cairn"))
        .args(["segment", map.to_str().unwrap(), "-o", "run", "--quiet"])
        .current_dir(d.path())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(std::time::Duration::from_millis(60));
    let _ = Command::new("kill")
        .args(["-HUP", &child.id().to_string()])
        .status();
    let status = child.wait().unwrap();
    assert!(status.success(), "{status:?}");
    let files = std::fs::read_dir(d.path().join("run")).unwrap().count();
    assert_eq!(files, 13, "the whole run");
}

/// Messages that name what the user did: a negative prominence in sigma is quoted as given,
/// the default one-beam area is called the default, and a map with no pixel value says so
/// before asking for a noise it could never use.
#[test]
fn threshold_messages_quote_what_was_given() {
    let d = tempfile::tempdir().unwrap();
    let m = fixture_map();
    let m = m.to_str().unwrap();
    refused(
        d.path(),
        &[
            "segment",
            m,
            "-o",
            "run",
            "--prominence=-1sigma",
            "--noise",
            "1e20",
        ],
        "(it is -1sigma)",
    );
    refused(
        d.path(),
        &[
            "segment", m, "-o", "run", "--beam", "5deg", "--floor", "4e21",
        ],
        "one beam (10197811 pixels) is larger than the whole map",
    );
}

/// Files that merely share a name with an output this run does not write are the user's
/// unless the folder holds an earlier run (its run.json): --force leaves them alone.
#[test]
fn force_spares_same_named_files_outside_an_earlier_run() {
    let d = tempfile::tempdir().unwrap();
    std::fs::create_dir(d.path().join("run")).unwrap();
    for name in ["overlay.png", "leaves-grown.fits", "notes.txt"] {
        std::fs::write(d.path().join("run").join(name), b"mine").unwrap();
    }
    let m = fixture_map();
    let (code, _, stderr) = cairn(
        &[
            "segment",
            m.to_str().unwrap(),
            "-o",
            "run",
            "--floor",
            "4e21",
            "--no-figure",
            "--force",
            "--quiet",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    for name in ["overlay.png", "leaves-grown.fits", "notes.txt"] {
        assert_eq!(
            std::fs::read(d.path().join("run").join(name)).unwrap(),
            b"mine",
            "{name}"
        );
    }
}

/// draw never writes a figure over the map it draws (given with --map or recorded in the
/// run), even with --force.
#[test]
fn draw_spares_its_map() {
    let d = tempfile::tempdir().unwrap();
    let m = fixture_map();
    let (code, _, stderr) = cairn(
        &[
            "segment",
            m.to_str().unwrap(),
            "-o",
            "run",
            "--floor",
            "4e21",
            "--no-figure",
            "--quiet",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    std::fs::create_dir(d.path().join("figs")).unwrap();
    let original = std::fs::read(&m).unwrap();
    std::fs::write(d.path().join("figs/overlay.png"), &original).unwrap();
    refused(
        d.path(),
        &[
            "draw",
            "run",
            "--map",
            "figs/overlay.png",
            "-o",
            "figs",
            "--force",
            "--quiet",
        ],
        "is an input of this run",
    );
    assert_eq!(
        std::fs::read(d.path().join("figs/overlay.png")).unwrap(),
        original
    );
}

/// The columns of a catalogue CSV (its `#` lines skipped), by name.
fn catalogue_columns(path: &Path) -> std::collections::BTreeMap<String, Vec<String>> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let names: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(|s| s.to_string())
        .collect();
    let mut cols: std::collections::BTreeMap<String, Vec<String>> =
        names.iter().map(|n| (n.clone(), Vec::new())).collect();
    for l in lines {
        for (n, v) in names.iter().zip(l.split(',')) {
            cols.get_mut(n).unwrap().push(v.to_string());
        }
    }
    cols
}

/// A temperature map undefined (NaN) at one pixel, the brightest leaf's peak, of a dust
/// emission map: that pixel takes the map's median temperature, with a warning that the run
/// records (run record, catalogue notes), instead of leaving the leaf and its ancestors
/// without column densities and masses. Self-consistency
/// check (masses themselves are checked against astropy in tests/segment_reference.rs): a
/// 14 K map with that one pixel undefined gives the masses of `--temperature 14K` to 1e-12.
#[test]
fn an_undefined_temperature_pixel_takes_the_maps_median() {
    let d = tempfile::tempdir().unwrap();
    let demo = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let map = cairn::map::load(&demo, &cairn::map::LoadOptions::default()).unwrap();
    let (mut py, mut px) = (0, 0);
    for ((y, x), &v) in map.data.indexed_iter() {
        if v > map.data[(py, px)] {
            (py, px) = (y, x);
        }
    }
    let mut t = map.data.mapv(|_| 14.0f32);
    t[(py, px)] = f32::NAN;
    let mut h = map.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("K".into()), "");
    cairn::fits_write::write_image_f32(&d.path().join("temp.fits"), t.view(), &h, true).unwrap();
    let demo = demo.to_str().unwrap();
    let common = ["--distance", "410pc", "--no-figure"];
    let mut with_map = vec!["segment", demo, "-o", "map"];
    with_map.extend(common);
    with_map.extend(["--temperature-map", "temp.fits"]);
    let (code, _, stderr) = cairn(&with_map, d.path());
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains(
            "is undefined (NaN) at 1 pixel where the map has data; it takes its median, 14 K"
        ),
        "{stderr}"
    );
    // The warning changes the masses, so the run keeps it as it keeps its other warnings: in
    // the run record and in each catalogue's notes (CSV, FITS COMMENT, VOTable DESCRIPTION).
    let warning = stderr
        .lines()
        .find_map(|l| l.strip_prefix("warning: the temperature map "))
        .map(|l| format!("the temperature map {l}"))
        .unwrap();
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("map/run.json")).unwrap())
            .unwrap();
    assert!(
        run["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str() == Some(warning.as_str())),
        "{}",
        run["warnings"]
    );
    let csv = std::fs::read_to_string(d.path().join("map/structures.csv")).unwrap();
    assert!(csv.contains(&format!("# note: {warning}\n")), "{csv}");
    let vot = std::fs::read_to_string(d.path().join("map/structures.vot")).unwrap();
    let doc = roxmltree::Document::parse(&vot).unwrap();
    let description = doc
        .descendants()
        .find(|n| n.has_tag_name("DESCRIPTION") && n.parent().unwrap().has_tag_name("TABLE"))
        .and_then(|n| n.text())
        .unwrap();
    assert!(description.lines().any(|l| l == warning), "{description}");
    let cards = catalogue_files::extension_cards(
        &std::fs::read(d.path().join("map/structures.fits")).unwrap(),
    );
    // The COMMENT cards hold the notes wrapped at word boundaries, the following lines
    // indented (FITS 4.0 section 4.4.2.4); the note is whole once joined again.
    let comments: Vec<&str> = cards
        .iter()
        .filter_map(|c| c.strip_prefix("COMMENT "))
        .map(str::trim)
        .collect();
    let warning_ascii = warning.replace(|c: char| !c.is_ascii(), "?");
    assert!(
        comments.join(" ").contains(&warning_ascii),
        "{}",
        comments.join("\n")
    );
    // With a temperature per pixel the catalogue has no one temperature: `temperature` is
    // left out and `temperature_map` names the file, as text; with one temperature,
    // `temperature` is a number (a parameter's type does not change from run to run).
    let params = catalogue_files::checked_params(&d.path().join("map"), "structures");
    assert!(!params.iter().any(|(c, _, _)| c.name == "temperature"));
    let (c, k, p) = params
        .iter()
        .find(|(c, _, _)| c.name == "temperature_map")
        .expect("temperature_map");
    assert_eq!(
        (c.value.as_str(), p.datatype.as_str()),
        ("temp.fits", "char")
    );
    assert_eq!((k.key.as_str(), k.value.as_str()), ("TEMPMAP", "temp.fits"));
    assert_eq!(run["physics"]["temperature_k"], serde_json::Value::Null);
    let mut uniform = vec!["segment", demo, "-o", "uniform"];
    uniform.extend(common);
    uniform.extend(["--temperature", "14K"]);
    let (code, _, stderr) = cairn(&uniform, d.path());
    assert_eq!(code, 0, "{stderr}");
    assert!(!stderr.contains("undefined"), "{stderr}");
    let params = catalogue_files::checked_params(&d.path().join("uniform"), "structures");
    assert!(!params.iter().any(|(c, _, _)| c.name == "temperature_map"));
    let (c, k, p) = params
        .iter()
        .find(|(c, _, _)| c.name == "temperature")
        .expect("temperature");
    assert_eq!((c.value.as_str(), c.unit.as_str()), ("14.0", "K"));
    assert_eq!(
        (p.datatype.as_str(), p.unit.as_deref()),
        ("double", Some("K"))
    );
    assert_eq!((k.key.as_str(), k.value.as_str()), ("TEMPERAT", "14.0"));
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("uniform/run.json")).unwrap())
            .unwrap();
    assert_eq!(run["physics"]["temperature_k"], 14.0);
    assert!(
        run["warnings"].as_array().unwrap().is_empty(),
        "{}",
        run["warnings"]
    );
    let a = catalogue_columns(&d.path().join("map/structures.csv"));
    let b = catalogue_columns(&d.path().join("uniform/structures.csv"));
    assert_eq!(a["id"], b["id"]);
    let peak_leaf = a["peak_x"]
        .iter()
        .zip(&a["peak_y"])
        .position(|(x, y)| x.parse::<usize>() == Ok(px) && y.parse::<usize>() == Ok(py))
        .expect("a structure peaks at the brightest pixel");
    for col in ["mass", "mass_excess", "n_peak"] {
        for (i, (x, y)) in a[col].iter().zip(&b[col]).enumerate() {
            let (x, y): (f64, f64) = (x.parse().unwrap(), y.parse().unwrap());
            assert!(x.is_finite(), "{col} of row {i} is {x}");
            assert!(
                (x - y).abs() <= 1e-12 * y.abs(),
                "{col} of row {i}: {x} against {y}"
            );
        }
        assert!(a[col][peak_leaf].parse::<f64>().unwrap() > 0.0);
    }
}

/// Reads a string keyword of HDU `hdu` (0-based) whole, continued cards included, with
/// CFITSIO's long-string reader (ffgkls, the FITS 4.0 section 4.2.1.2 convention; the CFITSIO
/// that the fitsio crate builds).
fn long_string_key(path: &Path, hdu: usize, key: &str) -> String {
    let mut f = fitsio::FitsFile::open(path).unwrap();
    f.hdu(hdu).unwrap();
    let k = std::ffi::CString::new(key).unwrap();
    let mut value: *mut std::os::raw::c_char = std::ptr::null_mut();
    let mut status = 0;
    // SAFETY: an open file at the wanted HDU; CFITSIO allocates `value`, freed below.
    unsafe {
        fitsio::sys::ffgkls(
            f.as_raw(),
            k.as_ptr(),
            &mut value,
            std::ptr::null_mut(),
            &mut status,
        );
        assert_eq!(status, 0, "{key} read from {}", path.display());
        let s = std::ffi::CStr::from_ptr(value)
            .to_string_lossy()
            .into_owned();
        fitsio::sys::fffree(value as *mut std::os::raw::c_void, &mut status);
        s
    }
}

/// The FITS catalogue keeps the input's full SHA-256, on one card after a keyword of 8
/// characters (FITS 4.0 section 4.1.2.1; its description on a COMMENT card), and a long input
/// file name whole, on continued cards where one card is too short, as the CSV and the run
/// record do.
#[test]
fn the_fits_catalogue_keeps_long_strings_whole() {
    let d = tempfile::tempdir().unwrap();
    let name = "an_invented_cloud_observed_in_far_infrared_dust_continuum_final_version_2.fits";
    std::fs::copy(fixture_map(), d.path().join(name)).unwrap();
    let (code, _, stderr) = cairn(
        &[
            "segment",
            name,
            "-o",
            "run",
            "--noise",
            "1e20",
            "--no-figure",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("run/run.json")).unwrap())
            .unwrap();
    let sha = run["input"]["sha256"].as_str().unwrap();
    assert_eq!(sha.len(), 64);
    let table = d.path().join("run/structures.fits");
    assert_eq!(long_string_key(&table, 1, "SHA256"), sha);
    assert_eq!(long_string_key(&table, 1, "INPUT"), name);
    let cards = catalogue_files::extension_cards(&std::fs::read(&table).unwrap());
    let at = cards
        .iter()
        .position(|c| c.starts_with("SHA256  ="))
        .unwrap();
    assert_eq!(cards[at].trim_end(), format!("SHA256  = '{sha}'"));
    assert!(!cards[at + 1].starts_with("CONTINUE"), "{}", cards[at + 1]);
    assert_eq!(
        cards[at + 1].trim_end(),
        "COMMENT SHA256: input_sha256: SHA-256 of the input file"
    );
    catalogue_files::checked_params(&d.path().join("run"), "structures");
}

/// A map without a celestial WCS has no pixel size on the sky, so --distance cannot give
/// masses: the run says so as a warning on stderr (with --quiet too) and the catalogue has no
/// mass columns, rather than leaving them out silently.
#[test]
fn masses_asked_of_a_map_without_sky_coordinates_are_refused_aloud() {
    let d = tempfile::tempdir().unwrap();
    let full = cairn::map::load(&fixture_map(), &cairn::map::LoadOptions::default()).unwrap();
    let mut h = cairn::header::Header::new();
    h.set("BUNIT", cairn::header::Value::Str("cm-2".into()), "");
    cairn::fits_write::write_image_f32(&d.path().join("nowcs.fits"), full.data.view(), &h, false)
        .unwrap();
    let (code, _, stderr) = cairn(
        &[
            "segment",
            "nowcs.fits",
            "-o",
            "run",
            "--noise",
            "1e20",
            "--distance",
            "300pc",
            "--temperature",
            "12K",
            "--beam",
            "18arcsec",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("warning: no masses or physics columns: nowcs.fits has no celestial WCS"),
        "{stderr}"
    );
    let csv = std::fs::read_to_string(d.path().join("run/structures.csv")).unwrap();
    let header = csv.lines().find(|l| !l.starts_with('#')).unwrap();
    assert!(header.split(',').all(|c| c != "mass"), "{header}");
}

/// BUNIT 'mag' does not say the band, which changes the masses 8.9 times over (A_V/A_K of
/// Rieke & Lebofsky 1985): segment's summary says which band it read and how to change it.
#[test]
fn the_extinction_band_read_is_said() {
    let d = tempfile::tempdir().unwrap();
    let full = cairn::map::load(&fixture_map(), &cairn::map::LoadOptions::default()).unwrap();
    let mut h = full.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("mag".into()), "");
    let data = full.data.mapv(|v| v / 9.4e20);
    cairn::fits_write::write_image_f32(&d.path().join("av.fits"), data.view(), &h, false).unwrap();
    // The band assumed (plain 'mag', no option): said, with the way to change it; asked for
    // (or named by the unit): said without the hint.
    for (band, out, says) in [
        (
            None,
            "assumed",
            "map read as visual extinction A_V in magnitudes; give --extinction-band K",
        ),
        (
            Some("V"),
            "v",
            "map read as visual extinction A_V in magnitudes\n",
        ),
        (
            Some("K"),
            "k",
            "map read as K-band extinction A_K in magnitudes\n",
        ),
    ] {
        let mut args = vec![
            "segment",
            "av.fits",
            "-o",
            out,
            "--noise",
            "0.1",
            "--no-figure",
        ];
        if let Some(b) = band {
            args.extend(["--extinction-band", b]);
        }
        let (code, stdout, stderr) = cairn(&args, d.path());
        assert_eq!(code, 0, "{stderr}");
        assert!(stdout.contains(says), "{band:?}: {stdout}");
        let csv = std::fs::read_to_string(d.path().join(out).join("structures.csv")).unwrap();
        let quantity = match band {
            Some("K") => "K-band extinction A_K",
            _ => "visual extinction A_V",
        };
        assert!(
            csv.contains(&format!("# parameter quantity = {quantity}  ")),
            "{band:?}: the catalogue names the band"
        );
    }
    // A unit that names its band: read so, and the option's contrary band refused in one
    // sentence naming the file, as A_V and A_K give masses 8.9 times apart.
    h.set("BUNIT", cairn::header::Value::Str("mag(AK)".into()), "");
    cairn::fits_write::write_image_f32(&d.path().join("ak.fits"), data.view(), &h, false).unwrap();
    let (code, stdout, stderr) = cairn(
        &[
            "segment",
            "ak.fits",
            "-o",
            "named",
            "--noise",
            "0.1",
            "--no-figure",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stdout.contains("map read as K-band extinction A_K in magnitudes\n"),
        "{stdout}"
    );
    let args = [
        "segment",
        "ak.fits",
        "-o",
        "contrary",
        "--extinction-band",
        "V",
        "--no-figure",
    ];
    let (code, stdout, stderr) = cairn(&args, d.path());
    assert_eq!(code, 2, "{stderr}");
    assert!(stdout.is_empty(), "{stdout}");
    assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
    for says in [
        "ak.fits",
        "has BUNIT 'mag(AK)', which names A_K, but --extinction-band V was given",
        "give --unit mag with --extinction-band V",
    ] {
        assert!(stderr.contains(says), "{stderr}");
    }
    assert!(!d.path().join("contrary").exists());
    // The other band given as the unit itself replaces the header's: said.
    let (code, _, stderr) = cairn(
        &[
            "segment",
            "ak.fits",
            "-o",
            "as_v",
            "--unit",
            "mag(AV)",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("--unit 'mag(AV)' replaces the header's BUNIT 'mag(AK)' (K-band extinction A_K): the values are read as visual extinction A_V"),
        "{stderr}"
    );
    // draw labels the map as the run read it, A_K from --extinction-band K on a plain 'mag':
    // its figure is the run's own, byte for byte (drawn as A_V, the colour bar's label
    // would differ).
    let (code, _, stderr) = cairn(
        &[
            "segment",
            "av.fits",
            "-o",
            "k-fig",
            "--noise",
            "0.1",
            "--extinction-band",
            "K",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    let (code, _, stderr) = cairn(&["draw", "k-fig", "-o", "k-drawn", "-q"], d.path());
    assert_eq!(code, 0, "{stderr}");
    assert!(
        std::fs::read(d.path().join("k-fig/overlay.png")).unwrap()
            == std::fs::read(d.path().join("k-drawn/overlay.png")).unwrap(),
        "an A_K run drawn otherwise than segment drew it"
    );
}

/// Masses asked for with --distance but not made (an emission map without a temperature) are
/// a warning on stderr, seen with --quiet too, and the run record's warnings and the
/// catalogue's notes keep it; without --distance the same line is part of the summary on
/// stdout, and neither record calls it a warning.
#[test]
fn masses_asked_for_and_not_made_are_a_warning() {
    let d = tempfile::tempdir().unwrap();
    let map = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let m = map.to_str().unwrap();
    let (code, stdout, stderr) = cairn(
        &[
            "segment",
            m,
            "-o",
            "a",
            "--distance",
            "300pc",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("warning: no masses: a dust-emission map needs a dust temperature"),
        "{stderr}"
    );
    assert!(!stdout.contains("no masses"), "{stdout}");
    let said = "no masses: a dust-emission map needs a dust temperature";
    let warnings = |run: &str| -> Vec<String> {
        let text = std::fs::read_to_string(d.path().join(run).join("run.json")).unwrap();
        let v: serde_json::Value = serde_json::from_str(&text).unwrap();
        v["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .map(|w| w.as_str().unwrap().to_string())
            .collect()
    };
    assert!(
        warnings("a").iter().any(|w| w.starts_with(said)),
        "{:?}",
        warnings("a")
    );
    let csv = std::fs::read_to_string(d.path().join("a/structures.csv")).unwrap();
    assert!(
        csv.contains(&format!("# note: {said}")),
        "no note in the catalogue"
    );
    let (code, stdout, stderr) = cairn(&["segment", m, "-o", "b", "--no-figure", "-q"], d.path());
    assert_eq!(code, 0, "{stderr}");
    assert!(stdout.contains("no masses: "), "{stdout}");
    assert!(!stderr.contains("no masses"), "{stderr}");
    assert!(warnings("b").is_empty(), "{:?}", warnings("b"));
}

/// The whole run from the command line with one and with two threads (RAYON_NUM_THREADS, which
/// every pool of the run follows, the output writer's included): byte-identical catalogues,
/// grown catalogues, label planes and hierarchy.
#[test]
fn command_line_runs_are_byte_identical_with_one_and_two_threads() {
    let d = tempfile::tempdir().unwrap();
    let map = fixture_map();
    let mut outs = Vec::new();
    for threads in ["1", "2"] {
        let out = format!("run{threads}");
        let o = Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args([
                "segment",
                map.to_str().unwrap(),
                "-o",
                &out,
                "--noise",
                "1e20",
                "--distance",
                "250pc",
                "--temperature",
                "12K",
                "--grow-leaves",
                "--no-figure",
                "-q",
            ])
            .env("RAYON_NUM_THREADS", threads)
            .current_dir(d.path())
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        outs.push(d.path().join(out));
    }
    for name in [
        "structures.csv",
        "structures.fits",
        "structures-grown.csv",
        "structures-grown.fits",
        "structures-grown.vot",
        "labels.fits",
        "leaves-grown.fits",
        "hierarchy.json",
    ] {
        assert!(
            std::fs::read(outs[0].join(name)).unwrap()
                == std::fs::read(outs[1].join(name)).unwrap(),
            "{name} differs between one and two threads"
        );
    }
}

/// The records keep what was given: a distance of 400pc is recorded as 400 (not the
/// 400.00000000000006 of its round trip through metres), levels as typed, and whole numbers
/// as FITS integers (FITS 4.0 section 4.2.3), other numbers with the digits that give back the
/// CSV's value (section 4.2.4).
#[test]
fn records_keep_what_was_given() {
    let d = tempfile::tempdir().unwrap();
    let map = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let (code, _, stderr) = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "r",
            "--distance",
            "400pc",
            "--temperature",
            "14K",
            "--floor",
            "50mJy/beam",
            "--prominence",
            "3sigma",
            "--min-area",
            "1.5beam",
            "--no-figure",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    let csv = std::fs::read_to_string(d.path().join("r/structures.csv")).unwrap();
    for says in [
        "# parameter distance = 400.0  ([pc] distance)",
        "# parameter floor = 0.05  ([Jy/beam] lowest level, given as 50mJy/beam)",
        "([Jy/beam] least rise of a peak, given as 3sigma)",
        "([pixel2] least area of a leaf, given as 1.5beam)",
    ] {
        assert!(csv.contains(says), "{says}");
    }
    // One temperature for the map: every structure's temperature is it, to the last digit.
    let mut rows = csv.lines().filter(|l| !l.starts_with('#'));
    let head: Vec<&str> = rows.next().unwrap().split(',').collect();
    let t = head.iter().position(|c| *c == "temperature").unwrap();
    let temperatures: Vec<&str> = rows.map(|l| l.split(',').nth(t).unwrap()).collect();
    assert!(!temperatures.is_empty() && temperatures.iter().all(|v| *v == "14.0"));
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("r/run.json")).unwrap())
            .unwrap();
    assert_eq!(run["physics"]["distance_pc"], 400.0);
    // The same thresholds in other words are the same thresholds for comparing runs: the
    // record's `given` has one spelling, `typed` the user's.
    let (code, _, stderr) = cairn(
        &[
            "segment",
            map.to_str().unwrap(),
            "-o",
            "r2",
            "--distance",
            "400pc",
            "--temperature",
            "14K",
            "--floor",
            "0.05",
            "--prominence",
            "3 sigma",
            "--min-area",
            "1.5beam",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    let run2: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("r2/run.json")).unwrap())
            .unwrap();
    assert_eq!(run2["parameters"]["prominence"]["typed"], "3 sigma");
    assert_eq!(run["parameters"]["floor"]["given"], "0.05 Jy/beam");
    assert_eq!(run2["parameters"]["floor"]["typed"], "0.05");
    for key in ["floor", "prominence", "min_area"] {
        assert_eq!(
            run["parameters"][key]["given"], run2["parameters"][key]["given"],
            "{key}"
        );
    }
    let (code, _, stderr) = cairn(&["compare", "r", "r2", "-o", "cmp", "-q"], d.path());
    assert_eq!(code, 0, "{stderr}");
    assert!(!stderr.contains("(as given) differs"), "{stderr}");
    // The FITS table's keywords and the VOTable's PARAMs agree with the CSV, of standard
    // form with their units (FITS 4.0 sections 4.1.2.1 and 4.3.2; VOTable 1.4 section 4.1).
    let params = catalogue_files::checked_params(&d.path().join("r"), "structures");
    let card = |name: &str| {
        params
            .iter()
            .find(|(c, _, _)| c.name == name)
            .map(|(_, k, _)| k.clone())
            .unwrap_or_else(|| panic!("no {name}"))
    };
    assert_eq!(
        (card("hdu").key, card("hdu").value),
        ("HDU".into(), "0".into())
    );
    let connectivity = card("connectivity");
    assert_eq!(
        (connectivity.key.as_str(), connectivity.value.as_str()),
        ("CONNECT", "8")
    );
    assert_eq!(card("distance").value, "400.0");
    assert_eq!(card("floor").key, "FLOOR");
    assert_eq!(card("noise").key, "NOISE");
}

/// `--unit` of another kind than the header's readable BUNIT changes what every value means:
/// a warning names both, and the run record keeps the header's unit; the same kind at another
/// scale (mJy/beam for Jy/beam: right when the header's unit is wrong, 1000 times off when it
/// is a slip) is said with its factor; the header's own unit respelled is not.
#[test]
fn a_unit_option_of_another_kind_than_the_header_is_said() {
    let d = tempfile::tempdir().unwrap();
    let map = "velloran-850um.fits";
    let (code, _, stderr) = segment_demo(d.path(), map, "col", &["--unit", "cm-2"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("warning: --unit 'cm-2' replaces the header's BUNIT 'Jy/beam' (flux density per beam): the values are read as H2 column density"),
        "{stderr}"
    );
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("col/run.json")).unwrap())
            .unwrap();
    assert_eq!(run["map"]["header_unit"], "Jy/beam");
    assert_eq!(run["map"]["unit"], "cm-2");
    let (code, _, stderr) = segment_demo(d.path(), map, "mjy", &["--unit", "mJy/beam"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("warning: --unit 'mJy/beam' replaces the header's BUNIT 'Jy/beam': every value is read as 1000 times smaller than the header says (and so is every sum and mass)"),
        "{stderr}"
    );
    let (code, _, stderr) = segment_demo(d.path(), map, "same", &["--unit", "Jy beam-1"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(!stderr.contains("replaces"), "{stderr}");
}

/// Text parameters stay text in the FITS table however they read: an input file named 2024
/// is the string '2024' (FITS 4.0 section 4.2.1), not the integer 2024.
#[test]
fn a_file_name_that_reads_as_a_number_stays_text() {
    let d = tempfile::tempdir().unwrap();
    std::fs::copy(fixture_map(), d.path().join("2024")).unwrap();
    let (code, _, stderr) = cairn(
        &["segment", "2024", "-o", "r", "--no-figure", "-q"],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    let bytes = std::fs::read(d.path().join("r/structures.fits")).unwrap();
    let cards: Vec<String> = bytes
        .chunks(80)
        .map(|c| String::from_utf8_lossy(c).into_owned())
        .collect();
    let input = cards.iter().find(|c| c.starts_with("INPUT   =")).unwrap();
    assert!(input.starts_with("INPUT   = '2024    '"), "{input}");
    // The VOTable's parameters carry the same types (VOTable 1.4 section 4.1: PARAM has a
    // datatype as FIELD does).
    let vot = std::fs::read_to_string(d.path().join("r/structures.vot")).unwrap();
    for says in [
        "<PARAM name=\"input\" datatype=\"char\" arraysize=\"*\" value=\"2024\">",
        "<PARAM name=\"hdu\" datatype=\"long\" value=\"0\">",
        "<PARAM name=\"min_area\" datatype=\"long\" unit=\"pixel2\" value=",
    ] {
        assert!(vot.contains(says), "{says}");
    }
    assert!(
        vot.lines().any(
            |l| l.starts_with("<PARAM name=\"floor\" datatype=\"double\" unit=\"cm-2\" value=")
        ),
        "floor as a double"
    );
}

/// A map whose values lie below zero (here the demo column-density map less 1e23 cm-2, as a
/// map with a wrong zero level would be) gives negative masses: a warning says how many, on
/// stderr, in the run record and in the catalogue's notes; mass_excess stays positive.
#[test]
fn negative_masses_are_a_warning() {
    let d = tempfile::tempdir().unwrap();
    let src = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let m = cairn::map::load(&src, &Default::default()).unwrap();
    let low = m.data.mapv(|v| v - 1e23);
    cairn::fits_write::write_image_f32(&d.path().join("low.fits"), low.view(), &m.header, true)
        .unwrap();
    let (code, _, stderr) = cairn(
        &[
            "segment",
            "low.fits",
            "-o",
            "r",
            "--distance",
            "300pc",
            "--temperature",
            "12K",
            "--no-figure",
            "-q",
        ],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    let csv = std::fs::read_to_string(d.path().join("r/structures.csv")).unwrap();
    let mut rows = csv.lines().filter(|l| !l.starts_with('#'));
    let head: Vec<&str> = rows.next().unwrap().split(',').collect();
    let col = |name: &str| head.iter().position(|c| *c == name).unwrap();
    let (mass, excess) = (col("mass"), col("mass_excess"));
    let rows: Vec<Vec<&str>> = rows.map(|l| l.split(',').collect()).collect();
    let negative = rows
        .iter()
        .filter(|r| r[mass].parse::<f64>().unwrap() < 0.0)
        .count();
    assert!(negative > 0, "the map lies below zero");
    assert!(rows.iter().all(|r| r[excess].parse::<f64>().unwrap() > 0.0));
    let said = format!("{negative} structures have a negative mass");
    assert!(stderr.contains(&format!("warning: {said}")), "{stderr}");
    assert!(
        csv.contains(&format!("# note: {said}")),
        "no note in the catalogue"
    );
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("r/run.json")).unwrap())
            .unwrap();
    assert!(
        run["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap().starts_with(&said)),
        "{}",
        run["warnings"]
    );
}

/// The default least area is one beam; on a map without a beam it is 9 pixels, which the
/// summary says with the way to change it, and the records keep as typed.
#[test]
fn the_least_area_without_a_beam_is_said() {
    let d = tempfile::tempdir().unwrap();
    let src = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let m = cairn::map::load(&src, &Default::default()).unwrap();
    let mut h = m.header.clone();
    for k in ["BMAJ", "BMIN", "BPA"] {
        h.remove(k);
    }
    cairn::fits_write::write_image_f32(&d.path().join("nobeam.fits"), m.data.view(), &h, true)
        .unwrap();
    let (code, stdout, stderr) = cairn(
        &["segment", "nobeam.fits", "-o", "r", "--no-figure"],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stdout.contains("min area 9 px (the map has no beam, so not the default of one beam; give --beam or --min-area)"),
        "{stdout}"
    );
    let csv = std::fs::read_to_string(d.path().join("r/structures.csv")).unwrap();
    assert!(csv.contains(
        "# parameter min_area = 9  ([pixel2] least area of a leaf, given as default (9 px: the map has no beam))"
    ));
    // With a beam, the default is one beam and nothing is said.
    let (code, stdout, stderr) = cairn(
        &["segment", src.to_str().unwrap(), "-o", "b", "--no-figure"],
        d.path(),
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(!stdout.contains("no beam"), "{stdout}");
}

/// The run record's numbers are JSON numbers, with their unit in the key's name or beside them
/// (`"unit"`), and a level given in the map's unit keeps that unit in `given`: `--floor
/// 5e21cm-2` on a map in cm-2 is "5e21 cm-2", as `--floor 5e21` is (one spelling for
/// comparing runs), and `typed` is the text as given. Text stays only where it is meant as
/// words (`temperature`, `typed`, `given`, the noise's `source`, `note`).
#[test]
fn the_run_record_keeps_numbers_as_numbers_and_levels_with_their_unit() {
    let d = tempfile::tempdir().unwrap();
    let map = fixture_map();
    let m = map.to_str().unwrap();
    let common = [
        "--prominence",
        "3sigma",
        "--distance",
        "300pc",
        "--temperature",
        "14K",
        "--sigma-nt",
        "0.3km/s",
        "--no-figure",
        "-q",
    ];
    let mut records = Vec::new();
    for (out, floor) in [("a", "5e21cm-2"), ("b", "5e21"), ("c", "0.5e22 cm^-2")] {
        let mut args = vec!["segment", m, "-o", out, "--floor", floor];
        args.extend(common);
        let (code, _, stderr) = cairn(&args, d.path());
        assert_eq!(code, 0, "{stderr}");
        let run: serde_json::Value = serde_json::from_str(
            &std::fs::read_to_string(d.path().join(out).join("run.json")).unwrap(),
        )
        .unwrap();
        let f = &run["parameters"]["floor"];
        assert_eq!(f["given"], "5e21 cm-2", "--floor {floor}");
        assert_eq!(f["typed"], floor);
        assert_eq!(
            (f["value"].as_f64(), f["unit"].as_str()),
            (Some(5e21), Some("cm-2"))
        );
        records.push(run);
    }
    let run = &records[0];
    let physics = run["physics"].as_object().unwrap();
    assert_eq!(physics["temperature_k"], 14.0);
    assert_eq!(physics["sigma_nt_km_per_s"], 0.3);
    assert_eq!(physics["distance_pc"], 300.0);
    // Every value of the physics record is a number (or null, or an object of numbers), but
    // for the temperature in words.
    for (k, v) in physics {
        match (k.as_str(), v) {
            ("temperature", serde_json::Value::String(t)) => assert_eq!(t, "14 K"),
            ("note", serde_json::Value::Null) => {}
            (_, serde_json::Value::Number(_) | serde_json::Value::Null) => {}
            (_, serde_json::Value::Object(o)) => {
                assert!(o.values().all(|x| x.is_number()), "{k}: {v}")
            }
            _ => panic!("{k} is {v}, not a number"),
        }
    }
    for key in ["floor", "prominence", "min_area"] {
        assert!(run["parameters"][key]["value"].is_number(), "{key}");
    }
    assert!(run["noise"]["value"].is_number());
    assert_eq!(run["noise"]["unit"], "cm-2");
}

/// A wavelength given in um is recorded as given (1100, not 1099.9999999999998, the double
/// that 1100 x 1e-6 m times 1e6 gives) in the catalogue's parameters and the run record.
#[test]
fn a_wavelength_is_recorded_as_given() {
    let d = tempfile::tempdir().unwrap();
    let demo = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-850um.fits");
    let args = [
        "segment",
        demo.to_str().unwrap(),
        "-o",
        "run",
        "--wavelength",
        "1100um",
        "--no-figure",
        "-q",
    ];
    let (code, _, stderr) = cairn(&args, d.path());
    assert_eq!(code, 0, "{stderr}");
    assert_ne!(
        std::hint::black_box(1100.0) * 1e-6 * 1e6,
        1100.0,
        "the double the record must not show"
    );
    let csv = std::fs::read_to_string(d.path().join("run/structures.csv")).unwrap();
    assert!(
        csv.contains("# parameter wavelength = 1100.0  ([um]"),
        "{}",
        csv.lines().find(|l| l.contains("wavelength")).unwrap_or("")
    );
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("run/run.json")).unwrap())
            .unwrap();
    let recorded = run
        .pointer("/map/wavelength_um")
        .or_else(|| run.pointer("/physics/wavelength_um"))
        .and_then(|v| v.as_f64());
    assert_eq!(recorded, Some(1100.0), "{run}");
}

/// A map without a beam smaller than the default least area without one (9 pixels, a 3 x 3
/// patch, common practice) is refused in those words, not as "one beam".
#[test]
fn a_map_smaller_than_the_default_area_without_a_beam_is_refused_so() {
    let d = tempfile::tempdir().unwrap();
    let mut h = cairn::header::Header::new();
    h.set("BUNIT", cairn::header::Value::Str("cm-2".into()), "");
    let data = ndarray::Array2::from_shape_vec((2, 2), vec![1e21f32, 2e21, 3e21, 4e21]).unwrap();
    cairn::fits_write::write_image_f32(&d.path().join("tiny.fits"), data.view(), &h, false)
        .unwrap();
    let args = [
        "segment",
        "tiny.fits",
        "-o",
        "run",
        "--floor",
        "1e21",
        "--prominence",
        "1e20",
    ];
    let (code, stdout, stderr) = cairn(&args, d.path());
    assert_eq!(code, 2, "{stderr}");
    assert!(stdout.is_empty() && !d.path().join("run").exists());
    assert!(
        stderr.contains("the default --min-area without a beam, 9 pixels (a 3 x 3 patch), is larger than the whole map")
            && stderr.contains("give --min-area in px.")
            && !stderr.contains("one beam"),
        "{stderr}"
    );
}

/// A threshold typed as a bare number is read in the map's unit; one so far from the map's
/// values that another unit was probably meant is said, with ways to write it (the run goes
/// on, and the run record keeps the warning), and a floor far above the map is refused with
/// them. The same levels with their units, or in the map's own range, get no such words.
#[test]
fn bare_number_thresholds_far_from_the_map_are_questioned() {
    let d = tempfile::tempdir().unwrap();
    let (column, emission) = ("velloran-column.fits", "velloran-850um.fits");
    let run = |map: &str, out: &str, extra: &[&str]| segment_demo(d.path(), map, out, extra);
    // 7 meant as magnitudes on a map in cm-2: below every pixel.
    let (code, _, stderr) = run(column, "f7", &["--floor", "7"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("warning: --floor 7 is a bare number, read in cm-2: far below every pixel")
            && stderr.contains("such as 7sigma or 7mag"),
        "{stderr}"
    );
    let rec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.path().join("f7/run.json")).unwrap())
            .unwrap();
    assert!(
        rec["warnings"].as_array().unwrap().iter().any(|w| w
            .as_str()
            .unwrap()
            .starts_with("--floor 7 is a bare number")),
        "{rec}"
    );
    // A column density as a bare number on a map in Jy/beam (with the temperature that
    // converts it): no peak rises that far.
    let (code, _, stderr) = run(
        emission,
        "p",
        &["--prominence", "3e20", "--temperature", "14K"],
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("--prominence 3e20 is a bare number, read in Jy/beam: more than the map's whole rise above the floor")
            && stderr.contains("such as 3e20cm-2"),
        "{stderr}"
    );
    // ... and as a floor: refused, with the spelling that works, which then runs.
    let (code, _, stderr) = run(emission, "f", &["--floor", "3e21", "--temperature", "14K"]);
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.contains("--floor 3e21 (a bare number, read in the map's unit Jy/beam) lies far above the highest value")
            && stderr.contains("give it with its unit, such as 3e21cm-2, or lower it"),
        "{stderr}"
    );
    assert!(!d.path().join("f").exists(), "nothing written");
    let (code, _, stderr) = run(
        emission,
        "f",
        &["--floor", "3e21cm-2", "--temperature", "14K"],
    );
    assert_eq!(code, 0, "{stderr}");
    // Without the temperature, a column density cannot be read on this map, so it is not
    // offered.
    let (code, _, stderr) = run(emission, "g", &["--floor", "3e21"]);
    assert_eq!(code, 2, "{stderr}");
    assert!(!stderr.contains("cm-2"), "{stderr}");
    // Levels with their units, and bare numbers within the map's range: nothing said.
    for (map, extra) in [
        (column, vec!["--floor", "7mag"]),
        (column, vec!["--floor", "5e21"]),
        (emission, vec!["--floor", "0.05", "--prominence", "0.02"]),
    ] {
        let (code, _, stderr) = run(map, "ok", &extra);
        assert_eq!(code, 0, "{stderr}");
        assert!(!stderr.contains("bare number"), "{extra:?}: {stderr}");
        std::fs::remove_dir_all(d.path().join("ok")).unwrap();
    }
}

/// A least area given on the sky or in beams that comes to less than one pixel (20 arcsec2 on
/// the demo map's 6" pixels: 0.556 of one) is said, with the beam's size in pixels; an area of
/// a pixel or more, or given in pixels, is not.
#[test]
fn a_least_area_below_one_pixel_is_said() {
    let d = tempfile::tempdir().unwrap();
    let map = "velloran-850um.fits";
    let (code, _, stderr) = segment_demo(d.path(), map, "a", &["--min-area", "20arcsec2"]);
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("warning: --min-area 20arcsec2 is 0.556 of a pixel, so one pixel is the least area and every peak passes the area test (a beam covers"),
        "{stderr}"
    );
    for (out, area) in [("b", "2beam"), ("c", "40arcsec2"), ("e", "1px")] {
        let (code, _, stderr) = segment_demo(d.path(), map, out, &["--min-area", area]);
        assert_eq!(code, 0, "{stderr}");
        assert!(!stderr.contains("--min-area"), "{area}: {stderr}");
    }
}

/// `--thresholds-from RUN` segments with the run's own floor, prominence, least area and
/// connectivity in map units and pixels, whatever this run's noise (here a noise ten times
/// the estimate, which would move sigma thresholds): the record's values are the run's to the
/// bit, said as taken from it, and on the same map the catalogue's rows are the run's. An
/// option given beside it replaces that threshold alone; a run of a map in another unit, or a
/// folder without a run record, is refused in one sentence with the fix.
#[test]
fn thresholds_from_an_earlier_run_are_that_runs_to_the_bit() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let map = "velloran-850um.fits";
    let (code, _, err) = segment_demo(dir, map, "science", &["--connectivity", "4"]);
    assert_eq!(code, 0, "{err}");
    let (code, _, err) = segment_demo(
        dir,
        map,
        "again",
        &["--thresholds-from", "science", "--noise", "1"],
    );
    assert_eq!(code, 0, "{err}");
    let record = |run: &str| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(dir.join(run).join("run.json")).unwrap())
            .unwrap()
    };
    let (science, again) = (record("science"), record("again"));
    for key in ["floor", "prominence", "min_area"] {
        let v = |r: &serde_json::Value| r["parameters"][key]["value"].as_f64().unwrap();
        assert_eq!(v(&again).to_bits(), v(&science).to_bits(), "{key}");
        let typed = again["parameters"][key]["typed"].as_str().unwrap();
        assert!(typed.ends_with("(from science/run.json)"), "{key}: {typed}");
    }
    assert_eq!(again["parameters"]["connectivity"], 4);
    assert_ne!(again["noise"]["value"], science["noise"]["value"]);
    let rows = |run: &str| -> Vec<String> {
        std::fs::read_to_string(dir.join(run).join("structures.csv"))
            .unwrap()
            .lines()
            .filter(|l| !l.starts_with('#'))
            .map(str::to_string)
            .collect()
    };
    // The error columns follow the noise; every other column is the run's.
    let header: Vec<String> = rows("science")[0].split(',').map(str::to_string).collect();
    let keep: Vec<usize> = (0..header.len())
        .filter(|&i| !header[i].ends_with("_err"))
        .collect();
    let pick = |rows: Vec<String>| -> Vec<Vec<String>> {
        rows.iter()
            .map(|r| {
                let cells: Vec<&str> = r.split(',').collect();
                keep.iter().map(|&i| cells[i].to_string()).collect()
            })
            .collect()
    };
    assert!(rows("science").len() > 10);
    assert_eq!(pick(rows("again")), pick(rows("science")));

    // One threshold given beside it replaces that one only.
    let (code, _, err) = segment_demo(
        dir,
        map,
        "lower",
        &["--thresholds-from", "science/run.json", "--floor", "0.01"],
    );
    assert_eq!(code, 0, "{err}");
    let lower = record("lower");
    assert_eq!(lower["parameters"]["floor"]["value"], 0.01);
    assert_eq!(
        lower["parameters"]["prominence"]["value"],
        science["parameters"]["prominence"]["value"]
    );
    assert_eq!(lower["parameters"]["connectivity"], 4);

    // A run of a map in another unit, and a folder that holds no run record.
    let column = PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("demo-maps")
        .join("velloran-column.fits");
    let column = column.to_str().unwrap();
    refused(
        dir,
        &[
            "segment",
            column,
            "-o",
            "other",
            "--thresholds-from",
            "science",
        ],
        "gives its thresholds in Jy/beam but",
    );
    std::fs::create_dir(dir.join("empty")).unwrap();
    refused(
        dir,
        &[
            "segment",
            column,
            "-o",
            "other",
            "--thresholds-from",
            "empty",
        ],
        "give --thresholds-from a run folder of segment or its run.json",
    );
    // Both levels given beside it: only the least area and connectivity are taken, whatever
    // the unit of the run's map.
    let (code, _, err) = cairn(
        &[
            "segment",
            column,
            "-o",
            "levels-given",
            "--thresholds-from",
            "science",
            "--floor",
            "3e21cm-2",
            "--prominence",
            "5e20cm-2",
            "--no-figure",
            "-q",
        ],
        dir,
    );
    assert_eq!(code, 0, "{err}");
    assert_eq!(
        record("levels-given")["parameters"]["min_area"]["value"],
        science["parameters"]["min_area"]["value"]
    );
    // A record changed by hand to a least area no run has is refused, naming it.
    let area = science["parameters"]["min_area"]["value"].as_u64().unwrap();
    let text = std::fs::read_to_string(dir.join("science/run.json"))
        .unwrap()
        .replace(&format!("\"value\": {area}\n"), "\"value\": 2.5\n");
    assert!(text.contains("\"value\": 2.5"), "the record was changed");
    std::fs::create_dir(dir.join("changed")).unwrap();
    std::fs::write(dir.join("changed/run.json"), text).unwrap();
    refused(
        dir,
        &[
            "segment",
            column,
            "-o",
            "other",
            "--thresholds-from",
            "changed",
            "--floor",
            "3e21cm-2",
            "--prominence",
            "5e20cm-2",
        ],
        "changed/run.json: holds a prominence of",
    );
}

/// A distance no molecular cloud is likely at (a parsec typed as a kiloparsec, or a bare few
/// parsecs) is run as given with a warning naming the likely fix, kept in the run record; a
/// plausible one is not; and masses without a gas temperature say why no leaf has a state.
/// The limits (10 pc, 100 kpc) are cairn's, common practice.
#[test]
fn implausible_distances_are_warned_and_unknown_states_explained() {
    let d = tempfile::tempdir().unwrap();
    let dir = d.path();
    let map = "velloran-column.fits";
    let (code, out, err) = segment_demo(dir, map, "far", &["--distance", "300kpc"]);
    assert_eq!(code, 0, "{err}");
    assert!(
        err.contains("warning: --distance 300kpc places the cloud more than 100 kpc away")
            && err.contains("give 300pc"),
        "{err}"
    );
    assert!(
        out.contains(
            "no gravitational state: give a gas temperature (--temperature or --temperature-map)"
        ),
        "{out}"
    );
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("far/run.json")).unwrap()).unwrap();
    assert!(
        run["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap().contains("300kpc")),
        "{run}"
    );
    let (code, _, err) = segment_demo(
        dir,
        map,
        "near",
        &["--distance", "3pc", "--temperature", "12K"],
    );
    assert_eq!(code, 0, "{err}");
    assert!(
        err.contains("--distance 3pc is nearer than any molecular cloud"),
        "{err}"
    );
    let (code, out, err) = segment_demo(
        dir,
        map,
        "fine",
        &["--distance", "1.4kpc", "--temperature", "12K"],
    );
    assert_eq!(code, 0, "{err}");
    assert!(!err.contains("warning"), "{err}");
    assert!(!out.contains("no gravitational state"), "{out}");
}

//! Bad input to `cairn synth`: one sentence naming the option and the fix, exit code 2, no
//! panic, no abort for want of memory, and no output folder or file left behind.

#[path = "common/cli.rs"]
mod cli;

use std::path::Path;

#[cfg(unix)]
use cli::cairn_limited;
use cli::{cairn, check_refused, listing};

fn assert_refused(extra: &[&str], names: &str, says: &str) {
    let dir = tempfile::tempdir().unwrap();
    let mut args = vec!["synth", "-o", "out"];
    args.extend_from_slice(extra);
    let o = cairn(&args, dir.path());
    check_refused(&o, &args, names, says);
    assert!(
        listing(dir.path()).is_empty(),
        "{args:?}: nothing written, no output folder: {:?}",
        listing(dir.path())
    );
}

#[test]
fn sizes_beyond_the_pixel_limit_are_refused_before_any_allocation() {
    for size in [
        "100000",
        "4294967296x4294967296",
        "18446744073709551615",
        "2x18446744073709551615",
        "46341",
    ] {
        assert_refused(&["--size", size], "--size", "2^31 - 1");
    }
}

#[test]
fn a_spec_file_with_a_huge_map_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column-spec.json");
    let mut spec: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(demo).unwrap()).unwrap();
    spec["nx"] = 1_000_000_000u64.into();
    spec["ny"] = 1_000_000_000u64.into();
    std::fs::write(dir.path().join("huge.json"), spec.to_string()).unwrap();
    let args = ["synth", "-o", "out", "--spec", "huge.json"];
    let o = cairn(&args, dir.path());
    check_refused(&o, &args, "--size (nx, ny in a spec file)", "2^31 - 1");
    assert_eq!(listing(dir.path()), ["huge.json"], "no output folder left");
}

#[cfg(unix)]
#[test]
fn a_map_needing_more_memory_than_the_machine_gives_is_refused() {
    // 4e8 pixels need about 16 GB; with 3 GB of address space the allocation fails (or the
    // machine's free memory is already too small), and cairn says so instead of aborting.
    for extra in [
        &["--size", "20000", "--no-background"][..],
        &["--size", "20000"][..],
        &["--size", "46000"][..],
    ] {
        let dir = tempfile::tempdir().unwrap();
        let mut args = vec!["synth", "-o", "out"];
        args.extend_from_slice(extra);
        let o = cairn_limited(&args, dir.path(), 3_000_000);
        check_refused(&o, &args, "--size", "GB of memory");
        assert!(listing(dir.path()).is_empty(), "{args:?}: no output folder");
    }
}

#[test]
fn too_many_cores_are_refused() {
    assert_refused(
        &["--cores", "100000000000"],
        "--cores",
        "at most 16384 cores",
    );
    assert_refused(&["--cores", "16385"], "--cores", "one per 4 pixels");
    assert_refused(
        &["--size", "8192", "--no-background", "--cores", "10000001"],
        "--cores",
        "at most 10000000",
    );
}

#[test]
fn non_finite_parameters_are_refused() {
    for (option, value) in [
        ("--background-index", "nan"),
        ("--background-index", "inf"),
        ("--background-index", "-inf"),
        ("--background-width", "nan"),
        ("--background-width", "inf"),
        ("--core-mass-index", "nan"),
    ] {
        // `--option=value`, so that clap takes "-inf" as a value.
        let pair = format!("{option}={value}");
        let mut extra = vec![pair.as_str()];
        if option == "--core-mass-index" {
            extra.extend(["--cores", "3"]);
        }
        assert_refused(&extra, option, "not a finite number");
    }
}

#[test]
fn out_of_range_background_parameters_are_refused() {
    assert_refused(
        &["--background-index", "1e6"],
        "--background-index",
        "between -10 and 10",
    );
    assert_refused(
        &["--background-width", "1000"],
        "--background-width",
        "at most 5",
    );
    assert_refused(
        &["--background", "1e300cm-2"],
        "--background",
        "32-bit floats",
    );
    assert_refused(
        &["--background", "1e-60cm-2"],
        "--background",
        "underflows to zero",
    );
}

#[test]
fn maps_with_values_beyond_single_precision_are_refused() {
    assert_refused(
        &["--core-mass", "1e30Msun,1e30Msun", "--cores", "2"],
        "--core-mass",
        "32-bit floats",
    );
    assert_refused(
        &[
            "--no-background",
            "--core-mass",
            "1e30Msun,1e30Msun",
            "--cores",
            "2",
        ],
        "--core-mass",
        "32-bit floats",
    );
    assert_refused(&["--noise", "1e300"], "--noise", "32-bit floats");
}

#[test]
fn a_beam_wider_than_the_map_is_refused() {
    assert_refused(
        &["--beam", "1e6arcsec", "--cores", "1"],
        "--beam",
        "wider than the map",
    );
    assert_refused(
        &["--size", "64", "--pixel", "1e-6arcsec"],
        "--beam",
        "wider than the map",
    );
}

/// `--name` must be a plain file name: no folders, not hidden, not empty.
#[test]
fn names_that_are_not_plain_file_names_are_refused() {
    for name in [
        "a/b",
        "/abs",
        "../escape",
        "",
        ".hidden",
        "a\\b",
        "tab\there",
    ] {
        assert_refused(
            &["--size", "64", "--name", name],
            "--name",
            "plain file name",
        );
    }
}

#[test]
fn the_refusals_leave_an_existing_output_folder_as_it_was() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir(dir.path().join("out")).unwrap();
    std::fs::write(dir.path().join("out/notes.txt"), b"keep").unwrap();
    let args = ["synth", "-o", "out", "--background-width", "1000"];
    let o = cairn(&args, dir.path());
    check_refused(&o, &args, "--background-width", "at most 5");
    assert_eq!(listing(&dir.path().join("out")), ["notes.txt"]);
}

#[test]
fn a_good_small_map_is_still_made() {
    let dir = tempfile::tempdir().unwrap();
    let o = cairn(
        &[
            "synth", "-o", "out", "--size", "64", "--cores", "3", "--name", "ok",
        ],
        dir.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert_eq!(
        listing(&dir.path().join("out")),
        ["ok-spec.json", "ok-truth.csv", "ok.fits"]
    );
    let truth = std::fs::read_to_string(dir.path().join("out/ok-truth.csv")).unwrap();
    assert!(
        truth
            .lines()
            .next()
            .unwrap()
            .contains("half width at half maximum"),
        "{truth}"
    );
}

/// Dust emission settings outside nature's range are refused by the option that is wrong,
/// before the background is made (which would otherwise underflow and blame the background).
#[test]
fn emission_settings_out_of_range_are_named() {
    assert_refused(&["--emission", "1e-30um"], "--emission", "outside 1.0um to");
    assert_refused(
        &["--emission", "850um", "--temperature", "1e-30K"],
        "--temperature",
        "outside 2.7255K to 2000.0K",
    );
}

#[test]
fn dust_opacity_options_without_an_emission_map_are_refused() {
    for extra in [
        &["--beta", "1.8"][..],
        &["--opacity", "0.2cm2/g"][..],
        &["--opacity-frequency", "500um", "--cores", "2"][..],
    ] {
        assert_refused(extra, extra[0], "give --emission");
    }
    // A value out of range is refused as segment refuses it.
    assert_refused(
        &["--emission", "850um", "--beta", "7"],
        "--beta 7",
        "outside 0 to 5",
    );
}

/// Slips in the cores' options name the option and the way out: a range given the wrong way
/// round (with the right order), a radius without a unit (with radii as examples), a noise in
/// the other emission unit (with the option that makes the map in it).
#[test]
fn core_and_noise_slips_name_the_option_and_the_fix() {
    assert_refused(
        &["--cores", "10", "--core-mass", "15Msun,0.5Msun"],
        "--core-mass",
        "give it the other way round, 0.5Msun,15Msun",
    );
    assert_refused(
        &["--cores", "10", "--core-radius", "0.02,0.05pc"],
        "--core-radius",
        "give a radius, such as 0.02pc or 0.08pc",
    );
    assert_refused(
        &["--emission", "850um", "--noise", "0.004Jy/beam"],
        "--noise",
        "or make the map in Jy/beam with --emission-unit Jy/beam",
    );
}

/// A bare noise on a column-density map is in cm-2: one far below the background (0.004 meant
/// in another unit) is made as asked, with a warning that it adds no visible noise.
#[test]
fn a_negligible_bare_noise_is_said() {
    let dir = tempfile::tempdir().unwrap();
    let o = cairn(
        &[
            "synth", "-o", "out", "--size", "64", "--noise", "0.004", "-q",
        ],
        dir.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(
        o.stderr.contains("warning: --noise 0.004 is read in cm-2, a millionth of the background (3e21 cm-2) or less, so it adds no visible noise; give it as a column density, such as 1e20cm-2."),
        "{}",
        o.stderr
    );
    let o = cairn(
        &[
            "synth", "-o", "ok", "--size", "64", "--noise", "1e20cm-2", "-q",
        ],
        dir.path(),
    );
    assert_eq!(o.code, 0, "{}", o.stderr);
    assert!(!o.stderr.contains("--noise"), "{}", o.stderr);
}

//! Running the `cairn` binary from integration tests: its exit code and output, optionally
//! with its address space limited, the listing of a folder (to check nothing was left), and
//! the rule every refusal of bad input keeps.
#![allow(dead_code)]

use std::path::Path;
use std::process::Command;

/// What a run of the binary gave.
pub struct Outcome {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

fn outcome(out: std::process::Output) -> Outcome {
    Outcome {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Runs a prepared command (for arguments that are not UTF-8, say).
pub fn outcome_of(cmd: &mut Command) -> Outcome {
    outcome(cmd.output().expect("run cairn"))
}

/// Runs cairn with `args` in `dir`.
pub fn cairn(args: &[&str], dir: &Path) -> Outcome {
    outcome(
        Command::new(env!("CARGO_BIN_EXE_cairn"))
            .args(args)
            .current_dir(dir)
            .output()
            .expect("run cairn"),
    )
}

/// Runs cairn with its address space limited to `kb` kilobytes (`ulimit -v`, through `sh`),
/// so that a runaway allocation fails the test instead of exhausting the machine.
pub fn cairn_limited(args: &[&str], dir: &Path, kb: u64) -> Outcome {
    outcome(
        Command::new("sh")
            .arg("-c")
            .arg(format!("ulimit -v {kb} && exec \"$0\" \"$@\""))
            // A fixed pool: each thread's stack counts against the limit, so that many-core
            // machines would fail where this one passes.
            .env("RAYON_NUM_THREADS", "2")
            .arg(env!("CARGO_BIN_EXE_cairn"))
            .args(args)
            .current_dir(dir)
            .output()
            .expect("run cairn under sh"),
    )
}

/// The names in `dir`, sorted.
pub fn listing(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

/// The rule for bad input, on a run given `args`: exit 2, one line on stderr naming `names`
/// and saying `says`, no panic or abort for want of memory, and nothing on stdout.
pub fn check_refused(o: &Outcome, args: &[&str], names: &str, says: &str) {
    assert_eq!(o.code, 2, "exit code for {args:?}: stderr {}", o.stderr);
    assert!(
        !o.stderr.contains("panicked") && !o.stderr.contains("memory allocation"),
        "panic or abort for {args:?}: {}",
        o.stderr
    );
    assert_eq!(
        o.stderr.trim_end().lines().count(),
        1,
        "one sentence for {args:?}: {}",
        o.stderr
    );
    assert!(
        o.stderr.contains(names),
        "{args:?}: stderr should name {names}: {}",
        o.stderr
    );
    assert!(
        o.stderr.contains(says),
        "{args:?}: stderr should say '{says}': {}",
        o.stderr
    );
    assert!(
        o.stdout.is_empty(),
        "{args:?}: nothing on stdout: {}",
        o.stdout
    );
}

/// The options of the demo runs: the demo cloud's invented distance and temperature, so the
/// catalogue has masses and states, and no figures.
pub const DEMO_RUN: [&str; 6] = [
    "--distance",
    "410pc",
    "--temperature",
    "14K",
    "--no-figure",
    "-q",
];

/// A finished run of the column-density demo map with states (distance and temperature given)
/// and no figures, in `dir/name`, made with the extra `args`.
pub fn demo_run(dir: &Path, name: &str, args: &[&str]) -> std::path::PathBuf {
    let map =
        std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("demo-maps/velloran-column.fits");
    let mut all = vec!["segment", map.to_str().unwrap(), "-o", name];
    all.extend_from_slice(&DEMO_RUN);
    all.extend_from_slice(args);
    let o = cairn_limited(&all, dir, 2_000_000);
    assert_eq!(o.code, 0, "{}", o.stderr);
    dir.join(name)
}

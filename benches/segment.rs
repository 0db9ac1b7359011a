//! The whole `segment` run (hierarchy, labels, measurements, physics, all outputs) on synthetic
//! maps, with in-run references.
//!
//! ```text
//! cargo bench --bench segment                       # 1024^2 and 2048^2
//! cargo bench --bench segment -- 1024 2048 4096 8192
//! CAIRN_BENCH_PYTHON=/path/to/venv/bin/python cargo bench --bench segment -- 1024 2048
//! cargo bench --bench segment -- 8192x4             # 32768^2: the 8192^2 map tiled 4 x 4
//! ```
//!
//! A size `NxK` tiles the N x N map K x K times, every other tile flipped so that structures
//! continue across the seams, for maps too large for the synthesis to make in memory (its
//! Fourier transforms); such maps are measured once rather than nine times.
//!
//! For each size N x N it makes a synthetic column-density map (log-normal background, 400
//! cores, noise; `cairn::synth`), writes it as FITS, and measures in child processes:
//! * the reference: a parallel sort of the map's pixel keys (the least any exact method
//!   must do), the best of nine calls;
//! * cairn's segmentation with outputs, its time (best of nine runs, each in a fresh
//!   process) and its memory: the process's peak resident memory, less its resident memory
//!   before loading the map and less the map's bytes, per pixel (the largest of the runs).
//!   This counts everything loading and segmenting add, code pages and thread stacks
//!   included, which weighs most on the smallest map;
//! * with `CAIRN_BENCH_PYTHON` set (a Python with the packages of tests/oracle/requirements.txt),
//!   scikit-image's `max_tree` on the same map (the raw tree only), timed inside Python
//!   after loading, two calls in each of the rounds' processes, the fastest call counting.
//!   Not run above 2048^2: it grows faster than N log N.
//!
//! The runs alternate, one of cairn and one of `max_tree`, so that on a shared machine both
//! meet the same slow and quiet spells; and since the twenty-seventh session the rounds go
//! through the sizes in turn (a sort, a cairn run and a `max_tree` process of the first size,
//! then of the next, and so on, nine times over), so that the growth from the smallest size
//! to the largest compares runs from the same spells too, not the best of one size's minutes
//! with the best of another's. The reference sort is one call per round, each in a fresh
//! process, as cairn's runs are.

use std::path::Path;
use std::process::Command;
use std::time::Instant;

use rayon::prelude::*;

/// Rounds of each timed measurement, the same at every size; the best is reported. Runs of
/// tens of milliseconds, which one slow spell of a shared machine can double, need many rounds
/// for the best to reflect the program rather than the spell (`max_tree`, whose calls take
/// over a second, gets the same rounds); and since the growth over the table compares the
/// best times of two sizes, both are the best of as many rounds (until the ninth session the
/// sizes above 1024^2 had five rounds against nine, which favoured the small size).
const RUNS: usize = 9;

/// A `/proc/self/status` figure in bytes (`VmHWM:` the peak resident memory, `VmRSS:` the
/// current one).
fn status_bytes(key: &str) -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .unwrap_or_default()
        .lines()
        .find(|l| l.starts_with(key))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|k| k.parse::<u64>().ok())
        .map(|k| k * 1024)
        .unwrap_or(0)
}

fn child_segment(path: &Path, out: &Path) {
    // The process before the map: its peak at the end, less this and the map's bytes, is
    // what loading and segmenting need beyond the map (the issue's memory measure).
    let before = status_bytes("VmRSS:");
    let map = cairn::map::load(path, &cairn::map::LoadOptions::default()).unwrap();
    let base = before + (map.data.len() * std::mem::size_of::<f32>()) as u64;
    let opts = cairn::segment::SegmentOptions {
        floor: Some(cairn::segment::Level::Value(3.0e21)),
        prominence: Some(cairn::segment::Level::Value(3.0e20)),
        min_area: Some(cairn::segment::Area::Pixels(10.0)),
        connectivity: cairn::hierarchy::Connectivity::Eight,
        grow_leaves: false,
        leaves_only: false,
        noise: cairn::inspect::NoiseChoice::Value(1.0e20),
        output: out.to_path_buf(),
        force: true,
        command_line: vec![],
        physics: cairn::score::Context {
            distance_m: Some(300.0 * cairn::physics::constants::PC),
            temperature_k: Some(cairn::score::Field::Uniform(12.0)),
            ..Default::default()
        },
        other_inputs: Vec::new(),
        threshold_texts: Default::default(),
        figure: None,
        label_choice: Default::default(),
    };
    let t = Instant::now();
    let s = cairn::segment::run(&map, &opts, &|_, _| {}).unwrap();
    let secs = t.elapsed().as_secs_f64();
    // The run record's phase timings, for reading where the time goes.
    if let Ok(rec) = std::fs::read_to_string(out.join("run.json"))
        && let Ok(v) = serde_json::from_str::<serde_json::Value>(&rec)
    {
        eprintln!("phases: {}", v["timings_seconds"]);
    }
    println!("{secs} {} {} {}", status_bytes("VmHWM:"), base, s.leaves);
}

fn child_sort(path: &Path, runs: usize) {
    let map = cairn::map::load(path, &cairn::map::LoadOptions::default()).unwrap();
    let mut best = f64::INFINITY;
    for _ in 0..runs {
        let t = Instant::now();
        let mut keys: Vec<u64> = map
            .data
            .as_slice()
            .unwrap()
            .par_iter()
            .enumerate()
            .map(|(i, v)| {
                let b = v.to_bits();
                let k = if b >> 31 == 1 { !b } else { b | 0x8000_0000 };
                ((k as u64) << 32) | i as u64
            })
            .collect();
        keys.par_sort_unstable();
        std::hint::black_box(&keys);
        best = best.min(t.elapsed().as_secs_f64());
    }
    println!("{best}");
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() > 3 && args[1] == "--child-segment" {
        return child_segment(Path::new(&args[2]), Path::new(&args[3]));
    }
    if args.len() > 3 && args[1] == "--child-sort" {
        return child_sort(Path::new(&args[2]), args[3].parse().unwrap());
    }
    // Sizes `N` or `NxK` (N x N tiled K x K times).
    let mut sizes: Vec<(usize, usize)> = args
        .iter()
        .skip(1)
        .filter_map(|a| {
            let (n, k) = a.split_once('x').unwrap_or((a, "1"));
            Some((n.parse().ok()?, k.parse().ok()?))
        })
        .collect();
    if sizes.is_empty() {
        sizes = vec![(1024, 1), (2048, 1)];
    }
    let python = std::env::var("CAIRN_BENCH_PYTHON").ok();
    let exe = std::env::current_exe().unwrap();
    let dir = tempfile::tempdir().unwrap();
    println!(
        "| size | sort (reference) | segment | segment / sort | peak memory above map / pixel | leaves | max_tree | max_tree / segment |"
    );
    println!("| --- | --- | --- | --- | --- | --- | --- | --- |");
    // Every size's map is made and written first; then the rounds go through the sizes in
    // turn (see `Size`).
    let mut all: Vec<Size> = Vec::new();
    for (base, tiles) in sizes {
        let n = base * tiles;
        let spec = cairn::synth::SynthSpec {
            nx: base,
            ny: base,
            pixel_arcsec: 4.0,
            beam_fwhm_arcsec: 12.0,
            background: Some(cairn::synth::Background {
                mean_column_cm2: 3e21,
                sigma_ln: 0.4,
                spectral_index: 3.0,
            }),
            population: Some(cairn::synth::CorePopulation {
                count: 400,
                mass_min_msun: 0.5,
                mass_max_msun: 20.0,
                mass_index: 2.35,
                radius_min_pc: 0.01,
                radius_max_pc: 0.05,
                profile: cairn::synth::Profile::Gaussian,
                margin_px: 10.0,
            }),
            noise_rms: 1.0e20,
            seed: 1234,
            ..Default::default()
        };
        let map = cairn::synth::generate(&spec).unwrap();
        let path = dir.path().join(format!("map{n}.fits"));
        if tiles > 1 {
            let tiled = ndarray::Array2::from_shape_fn((n, n), |(y, x)| {
                let (ty, tx) = (y / base, x / base);
                let (mut yy, mut xx) = (y % base, x % base);
                if ty % 2 == 1 {
                    yy = base - 1 - yy;
                }
                if tx % 2 == 1 {
                    xx = base - 1 - xx;
                }
                map.data[[yy, xx]]
            });
            drop(map.data);
            cairn::fits_write::write_image_f32(&path, tiled.view(), &map.header, true).unwrap();
        } else {
            cairn::fits_write::write_image_f32(&path, map.data.view(), &map.header, true).unwrap();
        }
        all.push(Size {
            n,
            runs: if tiles > 1 { 1 } else { RUNS },
            path,
            sort_s: f64::INFINITY,
            seg_s: f64::INFINITY,
            per_run_peak: 0.0,
            leaves: 0.0,
            maxtree: None,
        });
    }
    // max_tree is called twice per process and the faster call counts (the second runs warm;
    // a first call in a fresh process was slower in trials), so it is timed at least as
    // favourably as when all its calls ran in one process.
    let script = |path: &Path| {
        format!(
            "import time, numpy as np\nfrom astropy.io import fits\nfrom skimage.morphology import max_tree\nd = fits.getdata(r'{}').astype(np.float32)\nbest = float('inf')\nfor _ in range(2):\n    t = time.perf_counter()\n    max_tree(d, connectivity=2)\n    best = min(best, time.perf_counter() - t)\nprint(best)\n",
            path.display()
        )
    };
    let rounds = all.iter().map(|s| s.runs).max().unwrap_or(0);
    for run in 0..rounds {
        for size in all.iter_mut().filter(|s| run < s.runs) {
            let n = size.n;
            // The reference sort, one call per round in a fresh process.
            let sort = Command::new(&exe)
                .args(["--child-sort", size.path.to_str().unwrap(), "1"])
                .output()
                .unwrap();
            let sort_s: f64 = String::from_utf8_lossy(&sort.stdout)
                .trim()
                .parse()
                .unwrap();
            size.sort_s = size.sort_s.min(sort_s);
            let out = dir.path().join(format!("run{n}-{run}"));
            let seg = Command::new(&exe)
                .args([
                    "--child-segment",
                    size.path.to_str().unwrap(),
                    out.to_str().unwrap(),
                ])
                .output()
                .unwrap();
            eprint!("{n}^2 {}", String::from_utf8_lossy(&seg.stderr));
            let text = String::from_utf8_lossy(&seg.stdout).to_string();
            let f: Vec<f64> = text
                .split_whitespace()
                .map(|x| x.parse().unwrap())
                .collect();
            // Each round's outputs go before the next run: on this virtual machine, files
            // kept in the page cache make the next run's writes take fresh memory, which the
            // host backs page by page (a 268 MB write took 0.05 s into reused memory and
            // 0.6-0.9 s into fresh memory), a cost of the bench's own earlier rounds.
            std::fs::remove_dir_all(&out).unwrap();
            size.seg_s = size.seg_s.min(f[0]);
            size.per_run_peak = size.per_run_peak.max(f[1] - f[2]);
            size.leaves = f[3];
            if let Some(py) = python.as_ref().filter(|_| n <= 2048) {
                let o = Command::new(py)
                    .args(["-c", &script(&size.path)])
                    .output()
                    .unwrap();
                let t = String::from_utf8_lossy(&o.stdout)
                    .trim()
                    .parse::<f64>()
                    .unwrap_or(f64::NAN);
                eprintln!("{n}^2 max_tree {t:.3} s");
                size.maxtree = Some(size.maxtree.map_or(t, |b: f64| b.min(t)));
            }
        }
    }
    // (pixels, best segment time) of each size, for the growth line.
    let mut segments: Vec<(f64, f64)> = Vec::new();
    for size in &all {
        let n = size.n;
        let npix = (n * n) as f64;
        // Memory above what the process held with the map loaded, per pixel.
        let per_pixel = size.per_run_peak / npix;
        let (mt, ratio) = match size.maxtree {
            Some(t) => (format!("{t:.2} s"), format!("{:.0}x", t / size.seg_s)),
            None => ("not run".into(), "".into()),
        };
        println!(
            "| {n}^2 | {:.3} s | {} | {:.1} | {per_pixel:.1} B | {} | {mt} | {ratio} |",
            size.sort_s,
            seconds(size.seg_s),
            size.seg_s / size.sort_s,
            size.leaves
        );
        segments.push((npix, size.seg_s));
    }
    // The growth of the whole run from the smallest size to the largest, against N log N.
    if let (Some(&(n0, t0)), Some(&(n1, t1))) = (segments.first(), segments.last())
        && n1 > n0
    {
        println!(
            "\nGrowth from {:.0}^2 to {:.0}^2: {:.1}x ({:.4} s to {:.4} s); N log N grows {:.1}x.",
            n0.sqrt(),
            n1.sqrt(),
            t1 / t0,
            t0,
            t1,
            n1 * n1.ln() / (n0 * n0.ln())
        );
    }
}

/// One size of the table: its map and the best of its rounds so far.
struct Size {
    /// Side in pixels.
    n: usize,
    /// Rounds (one for a tiled map).
    runs: usize,
    path: std::path::PathBuf,
    /// Best reference sort, best cairn run, the largest memory of its runs (bytes above the
    /// map), its leaves, and the fastest `max_tree` call.
    sort_s: f64,
    seg_s: f64,
    per_run_peak: f64,
    leaves: f64,
    maxtree: Option<f64>,
}

/// Seconds with three decimals, or four significant digits below a tenth of a second.
fn seconds(t: f64) -> String {
    if t < 0.1 {
        format!("{t:.4} s")
    } else {
        format!("{t:.3} s")
    }
}

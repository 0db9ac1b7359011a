//! Timing of the hierarchy engine against a plain parallel sort of the same pixel keys.
//!
//! Run with `cargo bench --bench hierarchy` (1024^2 and 2048^2) or
//! `cargo bench --bench hierarchy -- 4096` to add 4096^2. Plain std::time timing, best of a
//! few runs.

use cairn::hierarchy::{Connectivity, Params, build, build_with_progress};
use ndarray::Array2;
use rayon::prelude::*;
use std::time::{Duration, Instant};

/// splitmix64: a small seeded generator, so the field is the same on every run.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    fn uniform(&mut self) -> f32 {
        (self.next() >> 40) as f32 / (1u64 << 24) as f32 - 0.5
    }
}

/// Running-sum box blur of radius `r` along rows, in place (edges clamped).
fn blur_rows(a: &mut Array2<f32>, r: usize) {
    let n = a.ncols();
    let mut buf = vec![0f32; n];
    for mut row in a.rows_mut() {
        let mut s = 0f64;
        for i in 0..=2 * r {
            s += row[i.saturating_sub(r).min(n - 1)] as f64;
        }
        for (x, b) in buf.iter_mut().enumerate() {
            *b = (s / (2 * r + 1) as f64) as f32;
            let out = x.saturating_sub(r);
            let inn = (x + r + 1).min(n - 1);
            s += row[inn] as f64 - row[out] as f64;
        }
        row.iter_mut().zip(&buf).for_each(|(d, &b)| *d = b);
    }
}

/// A smooth random field: white noise blurred three times by a box of radius 6 in both
/// directions (close to a Gaussian of width about 6 pixels), plus a little fresh noise so that
/// values are rarely equal.
fn field(n: usize, seed: u64) -> Array2<f32> {
    let mut rng = Rng(seed);
    let mut a = Array2::from_shape_simple_fn((n, n), || rng.uniform());
    for _ in 0..3 {
        blur_rows(&mut a, 6);
        a = a.t().as_standard_layout().into_owned();
        blur_rows(&mut a, 6);
        a = a.t().as_standard_layout().into_owned();
    }
    a.mapv_inplace(|v| v + 1e-4 * rng.uniform());
    a
}

/// Time the calling thread has spent running (Linux `schedstat`), so that the sequential sweep
/// can be timed apart from the load of other processes; NaN where unavailable.
fn thread_cpu_seconds() -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|t| t.split_whitespace().next()?.parse::<f64>().ok())
        .map_or(f64::NAN, |ns| ns * 1e-9)
}

fn best_of<T>(runs: usize, mut f: impl FnMut() -> T) -> (Duration, T) {
    let mut best = Duration::MAX;
    let mut out = None;
    for _ in 0..runs {
        let t = Instant::now();
        let r = f();
        best = best.min(t.elapsed());
        out = Some(r);
    }
    (best, out.unwrap())
}

/// A digest of everything the engine returns (structures with their moments, and labels), to
/// check that a change of the engine changes no result.
fn digest(h: &cairn::hierarchy::Hierarchy) -> u64 {
    use std::hash::{DefaultHasher, Hash, Hasher};
    let mut s = DefaultHasher::new();
    format!("{:?}", h.structures).hash(&mut s);
    h.labels.as_slice().unwrap().hash(&mut s);
    s.finish()
}

fn main() {
    let mut sizes = vec![1024usize, 2048];
    for a in std::env::args().skip(1) {
        if let Ok(n) = a.parse::<usize>()
            && !sizes.contains(&n)
        {
            sizes.push(n);
        }
    }
    println!("threads: {}", rayon::current_num_threads());
    for n in sizes {
        let map = field(n, 7 + n as u64);
        let data = map.as_slice().unwrap();
        let (mean, sd) = {
            let m = data.iter().map(|&v| v as f64).sum::<f64>() / data.len() as f64;
            let v = data.iter().map(|&x| (x as f64 - m).powi(2)).sum::<f64>() / data.len() as f64;
            (m, v.sqrt())
        };
        let runs = if n >= 4096 { 2 } else { 3 };
        let (t_sort, _) = best_of(runs, || {
            let mut keys: Vec<u64> = data
                .par_iter()
                .enumerate()
                .map(|(i, &v)| ((!(v.to_bits() ^ 0x8000_0000) as u64) << 32) | i as u64)
                .collect();
            keys.par_sort_unstable();
            keys
        });
        for (label, floor, prominence, min_area) in [
            (
                "all pixels, prominence 0.1 sd",
                f64::NEG_INFINITY,
                0.1 * sd,
                4usize,
            ),
            (
                "floor mean + 1 sd, prominence 0.5 sd",
                mean + sd,
                0.5 * sd,
                16,
            ),
            ("all pixels, prominence 0", f64::NEG_INFINITY, 0.0, 1),
        ] {
            let p = Params {
                floor,
                prominence,
                min_area,
                connectivity: Connectivity::Eight,
            };
            let (t, h) = best_of(runs, || build(map.view(), &p).unwrap());
            // Phase times from the progress hook: it reports SWEEP_STARTS after the sort and 0.9 after
            // the sweep.
            let start = Instant::now();
            let marks = std::cell::RefCell::new(Vec::new());
            build_with_progress(map.view(), &p, &|f| {
                if f == cairn::hierarchy::SWEEP_STARTS || f == 0.9 {
                    marks
                        .borrow_mut()
                        .push((start.elapsed().as_secs_f64(), thread_cpu_seconds()));
                }
            })
            .unwrap();
            let total = start.elapsed().as_secs_f64();
            let m = marks.into_inner();
            println!(
                "{n}^2 {label}: engine {:.3} s, sort {:.3} s, ratio {:.2} ({} structures, {} leaves, digest {:016x})",
                t.as_secs_f64(),
                t_sort.as_secs_f64(),
                t.as_secs_f64() / t_sort.as_secs_f64(),
                h.structures.len(),
                h.leaves().len(),
                digest(&h)
            );
            println!(
                "    phases of one more run: checks, neighbour bytes and buckets {:.3} s, sweep with the buckets sorted beside it {:.3} s (sweeping thread on-CPU {:.3} s), labels + moments {:.3} s",
                m[0].0,
                m[1].0 - m[0].0,
                m[1].1 - m[0].1,
                total - m[1].0
            );
        }
    }
}

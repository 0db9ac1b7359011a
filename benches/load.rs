//! Loading and inspecting a large map: time and peak memory.
//!
//! `cargo bench --bench load [-- SIZE]` writes a SIZE x SIZE float32 map (default 4096) to a
//! temporary folder, then measures, in the same run:
//! * the reference: reading the file's bytes into memory with `std::fs::read`;
//! * `cairn::map::load` of the same file (median of 5 runs each);
//! * the peak resident memory of a child process that loads and summarises the map as
//!   `cairn inspect` does, as a ratio to the map's bytes.

use std::io::Write;
use std::time::Instant;

fn peak_rss_bytes() -> u64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|k| k.parse::<u64>().ok())
        .map(|k| k * 1024)
        .unwrap_or(0)
}

fn write_map(path: &std::path::Path, n: usize) {
    let mut f = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    let cards = [
        "SIMPLE  =                    T".to_string(),
        "BITPIX  =                  -32".to_string(),
        "NAXIS   =                    2".to_string(),
        format!("NAXIS1  = {n:>20}"),
        format!("NAXIS2  = {n:>20}"),
        "BUNIT   = 'MJy/sr'".to_string(),
        "CTYPE1  = 'RA---TAN'".to_string(),
        "CTYPE2  = 'DEC--TAN'".to_string(),
        format!("CRPIX1  = {:>20}", n as f64 / 2.0),
        format!("CRPIX2  = {:>20}", n as f64 / 2.0),
        "CRVAL1  =                 45.0".to_string(),
        "CRVAL2  =                 30.0".to_string(),
        "CDELT1  =          -0.00111111".to_string(),
        "CDELT2  =           0.00111111".to_string(),
        "BMAJ    =           0.00505556".to_string(),
        "BMIN    =           0.00505556".to_string(),
        "END".to_string(),
    ];
    let mut h = String::new();
    for c in cards {
        h.push_str(&format!("{c:<80}"));
    }
    while !h.len().is_multiple_of(2880) {
        h.push(' ');
    }
    f.write_all(h.as_bytes()).unwrap();
    // A deterministic pseudo-random field (xorshift), written row by row.
    let mut s: u64 = 0x9E37_79B9_7F4A_7C15;
    let mut row = Vec::with_capacity(n * 4);
    let mut written = 0usize;
    for _ in 0..n {
        row.clear();
        for _ in 0..n {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            let v = (s >> 40) as f32 / (1u64 << 24) as f32;
            row.extend_from_slice(&v.to_be_bytes());
        }
        f.write_all(&row).unwrap();
        written += row.len();
    }
    let pad = (2880 - written % 2880) % 2880;
    f.write_all(&vec![0u8; pad]).unwrap();
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() > 2 && args[1] == "--child-inspect" {
        let path = std::path::Path::new(&args[2]);
        let m = cairn::map::load(path, &cairn::map::LoadOptions::default()).unwrap();
        let s = cairn::inspect::summarise(&m, &cairn::inspect::NoiseChoice::Estimate).unwrap();
        assert!(s.noise.sigma.is_some());
        println!("{}", peak_rss_bytes());
        return;
    }
    let n: usize = args
        .iter()
        .skip(1)
        .find_map(|a| a.parse().ok())
        .unwrap_or(4096);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bench_map.fits");
    write_map(&path, n);
    let map_bytes = (n * n * 4) as f64;

    let mut raw = Vec::new();
    let mut load = Vec::new();
    for _ in 0..5 {
        let t = Instant::now();
        let bytes = std::fs::read(&path).unwrap();
        raw.push(t.elapsed().as_secs_f64());
        drop(bytes);
        let t = Instant::now();
        let m = cairn::map::load(&path, &cairn::map::LoadOptions::default()).unwrap();
        load.push(t.elapsed().as_secs_f64());
        drop(m);
    }
    let (raw, load) = (median(raw), median(load));
    let child = std::process::Command::new(std::env::current_exe().unwrap())
        .args(["--child-inspect", path.to_str().unwrap()])
        .output()
        .unwrap();
    let peak: f64 = String::from_utf8_lossy(&child.stdout)
        .trim()
        .parse()
        .unwrap_or(f64::NAN);
    println!("map: {n} x {n} float32 ({:.1} MB)", map_bytes / 1e6);
    println!("reference, std::fs::read of the file: {raw:.3} s");
    println!(
        "cairn::map::load:                     {load:.3} s  (ratio {:.2} to the reference)",
        load / raw
    );
    println!(
        "inspect peak resident memory:         {:.1} MB  (ratio {:.2} to the map's bytes)",
        peak / 1e6,
        peak / map_bytes
    );
}

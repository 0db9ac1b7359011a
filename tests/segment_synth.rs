//! `segment` on synthetic maps whose truth is known (made by cairn's own `synth`, so these are
//! consistency checks of the whole chain, not outside references): injected cores are
//! recovered, pure noise gives no significant leaf, and catalogues do not depend on the
//! number of threads.

use cairn::hierarchy::Connectivity;
use cairn::inspect::NoiseChoice;
use cairn::segment::{Area, Level, SegmentOptions};
use cairn::synth::{self, Background, CorePopulation, Output, Profile, SynthSpec};

fn options(out: &std::path::Path, floor: Level, prominence: Level, noise: f64) -> SegmentOptions {
    SegmentOptions {
        floor: Some(floor),
        prominence: Some(prominence),
        min_area: Some(Area::Beams(0.5)),
        connectivity: Connectivity::Eight,
        grow_leaves: false,
        leaves_only: false,
        noise: NoiseChoice::Value(noise),
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

fn write_map(dir: &std::path::Path, spec: &SynthSpec) -> (std::path::PathBuf, synth::SynthMap) {
    let m = synth::generate(spec).unwrap();
    let p = dir.join("map.fits");
    cairn::fits_write::write_image_f32(&p, m.data.view(), &m.header, true).unwrap();
    (p, m)
}

/// The map of `spec` written as FITS into a new temporary folder and loaded back: the folder,
/// the synthesis and the map as `segment` reads it.
fn written_and_loaded(spec: &SynthSpec) -> (tempfile::TempDir, synth::SynthMap, cairn::map::Map) {
    let dir = tempfile::tempdir().unwrap();
    let (path, m) = write_map(dir.path(), spec);
    let map = cairn::map::load(&path, &Default::default()).unwrap();
    (dir, m, map)
}

/// `segment` on `map` in a pool of `threads` threads.
fn run_with_threads(map: &cairn::map::Map, o: &SegmentOptions, threads: usize) {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap();
    pool.install(|| cairn::segment::run(map, o, &|_, _| {}))
        .unwrap();
}

fn leaves_of(csv: &str) -> Vec<(f64, f64)> {
    let mut lines = csv.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
    let (k, px, py) = (col("kind"), col("peak_x"), col("peak_y"));
    lines
        .map(|l| l.split(',').collect::<Vec<_>>())
        .filter(|f| f[k] == "leaf")
        .map(|f| (f[px].parse().unwrap(), f[py].parse().unwrap()))
        .collect()
}

#[test]
fn isolated_bright_cores_are_recovered_as_one_leaf_each() {
    let noise = 1.0e20;
    let beam_px = 3.0; // 18 arcsec beam on 6 arcsec pixels
    let spec = SynthSpec {
        nx: 512,
        ny: 512,
        beam_fwhm_arcsec: 18.0,
        pixel_arcsec: 6.0,
        background: Some(Background {
            mean_column_cm2: 1.5e21,
            sigma_ln: 0.15,
            spectral_index: 3.5,
        }),
        population: Some(CorePopulation {
            count: 70,
            mass_min_msun: 0.8,
            mass_max_msun: 15.0,
            mass_index: 2.35,
            radius_min_pc: 0.015,
            radius_max_pc: 0.04,
            profile: Profile::Gaussian,
            margin_px: 12.0,
        }),
        output: Output::ColumnDensity,
        noise_rms: noise,
        seed: 77,
        ..SynthSpec::default()
    };
    let (dir, m, map) = written_and_loaded(&spec);
    let out = dir.path().join("run");
    cairn::segment::run(
        &map,
        &options(&out, Level::Value(2.0e21), Level::Sigma(5.0), noise),
        &|_, _| {},
    )
    .unwrap();
    let leaves = leaves_of(&std::fs::read_to_string(out.join("structures.csv")).unwrap());
    // Isolated: no other core within 4 beams, and at least 4 beams from the edges.
    let truth = &m.truth;
    let isolated: Vec<_> = truth
        .iter()
        .filter(|c| c.peak >= 10.0 * noise)
        .filter(|c| {
            truth.iter().all(|o| {
                o.id == c.id || ((o.x - c.x).powi(2) + (o.y - c.y).powi(2)).sqrt() > 4.0 * beam_px
            }) && c.x > 4.0 * beam_px
                && c.y > 4.0 * beam_px
                && c.x < 511.0 - 4.0 * beam_px
                && c.y < 511.0 - 4.0 * beam_px
        })
        .collect();
    assert!(
        isolated.len() >= 20,
        "the scene must hold enough isolated bright cores ({})",
        isolated.len()
    );
    let recovered = isolated
        .iter()
        .filter(|c| {
            leaves
                .iter()
                .filter(|(x, y)| ((x - c.x).powi(2) + (y - c.y).powi(2)).sqrt() <= beam_px)
                .count()
                == 1
        })
        .count();
    let rate = recovered as f64 / isolated.len() as f64;
    eprintln!(
        "recovered {recovered} of {} isolated cores, {} leaves",
        isolated.len(),
        leaves.len()
    );
    assert!(
        rate >= 0.95,
        "recovered {recovered} of {} isolated cores with S/N >= 10",
        isolated.len()
    );
}

#[test]
fn pure_noise_gives_no_leaf_of_five_sigma_prominence() {
    let noise = 0.02;
    let spec = SynthSpec {
        nx: 400,
        ny: 300,
        background: None,
        output: Output::DustEmission {
            wavelength_um: 850.0,
            temperature_k: 15.0,
            unit: synth::EmissionUnit::MJyPerSr,
            opacity: cairn::physics::DustOpacity::default(),
        },
        noise_rms: noise,
        seed: 5,
        ..SynthSpec::default()
    };
    let (dir, _, map) = written_and_loaded(&spec);
    let out = dir.path().join("run");
    // Floor far below the noise: every pixel takes part; only the prominence decides.
    let mut o = options(&out, Level::Value(-1.0), Level::Sigma(5.0), noise);
    o.min_area = Some(Area::Pixels(1.0));
    let s = cairn::segment::run(&map, &o, &|_, _| {}).unwrap();
    // One tree holds the whole map; its top counts as a leaf (not a root with children) when
    // nothing rises 5 sigma within it.
    assert_eq!(s.trees, 1);
    assert_eq!(s.roots, 0);
    assert_eq!(
        s.leaves, 1,
        "a single structure: the map itself, no significant peak inside"
    );
    assert_eq!(s.branches, 0);
}

#[test]
fn catalogues_are_byte_identical_with_one_and_two_threads() {
    let spec = SynthSpec {
        nx: 300,
        ny: 260,
        population: Some(CorePopulation {
            count: 30,
            mass_min_msun: 0.5,
            mass_max_msun: 10.0,
            mass_index: 2.35,
            radius_min_pc: 0.02,
            radius_max_pc: 0.06,
            profile: Profile::Gaussian,
            margin_px: 5.0,
        }),
        noise_rms: 1.0e20,
        seed: 9,
        ..SynthSpec::default()
    };
    let (dir, _, map) = written_and_loaded(&spec);
    let mut outputs = Vec::new();
    for threads in [1, 2] {
        let out = dir.path().join(format!("run{threads}"));
        let mut o = options(&out, Level::Value(3.5e21), Level::Sigma(3.0), 1.0e20);
        o.grow_leaves = true;
        run_with_threads(&map, &o, threads);
        outputs.push(out);
    }
    for name in [
        "structures.csv",
        "structures.fits",
        "labels.fits",
        "leaves-grown.fits",
        "hierarchy.json",
        // The leaves over their grown footprints: their sums are gathered in row blocks fixed
        // by the map size (several here), whatever the thread count.
        "structures-grown.csv",
        "structures-grown.fits",
        "structures-grown.vot",
    ] {
        let a = std::fs::read(outputs[0].join(name)).unwrap();
        let b = std::fs::read(outputs[1].join(name)).unwrap();
        assert!(a == b, "{name} differs between 1 and 2 threads");
    }
}

/// On a map whose label map is large enough to be begun while the hierarchy is built (its file
/// made ready on an idle core, `fits_write::MAPPED_BYTES`; on Linux, with two threads),
/// `labels.fits` holds the hierarchy's labels as CFITSIO (through the `fitsio` crate) reads
/// them back, the same with 1 thread (where it is written at once) and 2, and no temporary
/// file is left in the output folder. (Which way the file was written is not visible from
/// here; both ways give these bytes.)
#[test]
fn large_label_maps_begun_ahead_hold_the_hierarchy() {
    let (nx, ny) = (1500, 1450);
    assert!(nx * ny * 4 >= cairn::fits_write::MAPPED_BYTES);
    let spec = SynthSpec {
        nx,
        ny,
        noise_rms: 1.0e20,
        seed: 21,
        ..SynthSpec::default()
    };
    let (dir, _, map) = written_and_loaded(&spec);
    let (floor, prominence) = (2.5e21, 3.0e20);
    let expected = cairn::hierarchy::build(
        map.data.view(),
        &cairn::hierarchy::Params {
            floor,
            prominence,
            min_area: 10,
            connectivity: Connectivity::Eight,
        },
    )
    .unwrap()
    .labels;
    assert!(expected.iter().any(|&l| l >= 0) && expected.iter().any(|&l| l < 0));
    let mut files = Vec::new();
    for threads in [1, 2] {
        let out = dir.path().join(format!("run{threads}"));
        let mut o = options(&out, Level::Value(floor), Level::Value(prominence), 1.0e20);
        o.min_area = Some(Area::Pixels(10.0));
        run_with_threads(&map, &o, threads);
        let mut f = fitsio::FitsFile::open(out.join("labels.fits")).unwrap();
        let hdu = f.primary_hdu().unwrap();
        let back: Vec<i32> = hdu.read_image(&mut f).unwrap();
        assert!(
            back.as_slice() == expected.as_slice().unwrap(),
            "{threads} thread(s): labels.fits differs from the hierarchy's labels"
        );
        let mut names: Vec<String> = std::fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        assert_eq!(
            names,
            [
                "hierarchy.dot",
                "hierarchy.json",
                "labels.fits",
                "run.json",
                "structures.csv",
                "structures.fits",
                "structures.vot"
            ],
            "{threads} thread(s)"
        );
        files.push(std::fs::read(out.join("labels.fits")).unwrap());
    }
    assert!(
        files[0] == files[1],
        "labels.fits differs between 1 and 2 threads"
    );
}

/// The catalogue gives centroids in a second frame: ICRS for a galactic map, galactic for an
/// ICRS one, each the conversion of the map-frame columns (whose numbers are checked against
/// astropy.coordinates in tests/wcs_astropy.rs and tests/segment_reference.rs).
#[test]
fn centroids_are_also_given_in_the_other_frame() {
    use cairn::wcs::{SkyFrame, convert_frame};
    for (frame, native, other, from, to) in [
        (
            synth::Frame::Galactic,
            ("glon", "glat"),
            ("ra", "dec"),
            SkyFrame::Galactic,
            SkyFrame::Icrs,
        ),
        (
            synth::Frame::Icrs,
            ("ra", "dec"),
            ("glon", "glat"),
            SkyFrame::Icrs,
            SkyFrame::Galactic,
        ),
    ] {
        let spec = SynthSpec {
            nx: 200,
            ny: 180,
            frame,
            noise_rms: 1.0e20,
            seed: 4,
            ..SynthSpec::default()
        };
        let (dir, _, map) = written_and_loaded(&spec);
        let out = dir.path().join("run");
        let o = options(&out, Level::Value(2.0e21), Level::Sigma(3.0), 1.0e20);
        cairn::segment::run(&map, &o, &|_, _| {}).unwrap();
        let csv = std::fs::read_to_string(out.join("structures.csv")).unwrap();
        let mut lines = csv.lines().filter(|l| !l.starts_with('#'));
        let header: Vec<&str> = lines.next().unwrap().split(',').collect();
        let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
        let (a, b, c, d) = (col(native.0), col(native.1), col(other.0), col(other.1));
        let mut n = 0;
        for l in lines {
            let f: Vec<f64> = l
                .split(',')
                .map(|v| v.parse().unwrap_or(f64::NAN))
                .collect();
            let (lon, lat) = convert_frame(f[a], f[b], &from, &to).unwrap();
            assert_eq!((f[c], f[d]), (lon, lat));
            let (blon, blat) = convert_frame(f[c], f[d], &to, &from).unwrap();
            let dlon = ((blon - f[a] + 540.0) % 360.0 - 180.0) * f[b].to_radians().cos();
            assert!(dlon.abs() < 1e-10 && (blat - f[b]).abs() < 1e-10);
            n += 1;
        }
        assert!(n > 0, "the map gave no structure");
        // The VOTable names both frames for VO tools.
        let vot = std::fs::read_to_string(out.join("structures.vot")).unwrap();
        let (first, second) = match frame {
            synth::Frame::Galactic => ("galactic", "ICRS"),
            _ => ("ICRS", "galactic"),
        };
        assert!(vot.contains(&format!("<COOSYS ID=\"map_frame\" system=\"{first}\"/>")));
        assert!(vot.contains(&format!(
            "<COOSYS ID=\"second_frame\" system=\"{second}\"/>"
        )));
    }
}

/// The catalogue's integrated flux density of an isolated core on an empty sky is the
/// optically thin flux of its mass, S = M kappa_nu B_nu(T) / d^2 (Hildebrand 1983, the
/// relation `synth` makes its emission with), on maps in Jy/beam (the sum times the pixel's
/// solid angle over the beam's) and MJy/sr (times the pixel's solid angle); kappa_nu and
/// B_nu are cairn's, checked against astropy 8.0.2 in tests/physics_reference.rs. The floor at
/// 1e-9 of the peak leaves out a negligible part of the core.
#[test]
fn integrated_flux_density_is_the_flux_of_the_mass() {
    use cairn::physics::constants::{C, JY, M_SUN, PC};
    let (mass_msun, d_pc, t_k, wl_um) = (2.0, 250.0, 15.0, 850.0);
    let opacity = cairn::physics::DustOpacity::default();
    let nu = C / (wl_um * 1e-6);
    let expected = mass_msun * M_SUN * opacity.kappa_si(nu) * cairn::physics::planck_nu(nu, t_k)
        / (d_pc * PC).powi(2)
        / JY;
    for unit in [
        synth::EmissionUnit::JyPerBeam,
        synth::EmissionUnit::MJyPerSr,
    ] {
        let spec = SynthSpec {
            nx: 128,
            ny: 128,
            background: None,
            distance_pc: d_pc,
            cores: vec![synth::CoreSpec {
                x: 63.6,
                y: 64.2,
                mass_msun,
                radius_pc: 0.03,
                profile: Profile::Gaussian,
            }],
            output: Output::DustEmission {
                wavelength_um: wl_um,
                temperature_k: t_k,
                unit,
                opacity,
            },
            noise_rms: 0.0,
            ..SynthSpec::default()
        };
        let dir = tempfile::tempdir().unwrap();
        let (path, m) = write_map(dir.path(), &spec);
        let peak = m.data.iter().cloned().fold(0.0f32, f32::max) as f64;
        let map = cairn::map::load(&path, &Default::default()).unwrap();
        let out = dir.path().join("run");
        let mut o = options(
            &out,
            Level::Value(1e-9 * peak),
            Level::Value(0.5 * peak),
            1e-3 * peak,
        );
        o.min_area = Some(Area::Pixels(1.0));
        let s = cairn::segment::run(&map, &o, &|_, _| {}).unwrap();
        assert_eq!(
            s.leaves + s.branches + s.roots,
            1,
            "{unit:?}: one structure"
        );
        let csv = std::fs::read_to_string(out.join("structures.csv")).unwrap();
        let mut lines = csv.lines().filter(|l| !l.starts_with('#'));
        let header: Vec<&str> = lines.next().unwrap().split(',').collect();
        let row: Vec<&str> = lines.next().unwrap().split(',').collect();
        let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
        let flux: f64 = row[col("flux")].parse().unwrap();
        assert!(
            (flux / expected - 1.0).abs() < 1e-5,
            "{unit:?}: catalogue {flux} Jy, M kappa B / d^2 = {expected} Jy"
        );
        // The excess above the floor differs from the whole by the floor times the area.
        let excess: f64 = row[col("flux_excess")].parse().unwrap();
        assert!(
            excess < flux && excess > (1.0 - 1e-5) * flux,
            "{excess} {flux}"
        );
    }
}

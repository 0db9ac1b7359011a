//! Synthetic maps: the injected truth is what the map holds (mass conservation, peaks, dust
//! emission, the last a self-consistency round trip through cairn's own physics), the output
//! is deterministic, and the background has the requested power spectrum (measured by
//! `tests/oracle/synth_powerspec.py`, numpy 2.4.6) and WCS (astropy 8.0.2).

#[path = "common/cli.rs"]
mod cli;
mod common;

use cairn::physics::constants::{ARCSEC, C, M_H, M_SUN, PC};
use cairn::physics::{self, DustOpacity, MU_H2};
use cairn::synth::{
    Background, CorePopulation, CoreSpec, EmissionUnit, Output, Profile, SynthSpec, generate,
    pixel_to_world, write_truth_csv,
};
use common::{assert_close, fixture_json, fixture_path, num, nums};
use ndarray::Array2;

fn base_spec() -> SynthSpec {
    SynthSpec {
        nx: 150,
        ny: 128,
        pixel_arcsec: 6.0,
        distance_pc: 250.0,
        beam_fwhm_arcsec: 18.0,
        background: Some(Background {
            mean_column_cm2: 2.0e21,
            sigma_ln: 0.5,
            spectral_index: 3.0,
        }),
        cores: vec![
            CoreSpec {
                x: 30.0,
                y: 32.5,
                mass_msun: 1.0,
                radius_pc: 0.02,
                profile: Profile::Gaussian,
            },
            CoreSpec {
                x: 100.3,
                y: 40.7,
                mass_msun: 3.5,
                radius_pc: 0.05,
                profile: Profile::critical_bonnor_ebert(),
            },
            // Smaller than a pixel (pixel = 0.0073 pc at 250 pc).
            CoreSpec {
                x: 70.0,
                y: 95.0,
                mass_msun: 0.2,
                radius_pc: 0.002,
                profile: Profile::Gaussian,
            },
            CoreSpec {
                x: 120.0,
                y: 100.0,
                mass_msun: 0.8,
                radius_pc: 0.03,
                profile: Profile::BonnorEbert { xi_max: 3.0 },
            },
        ],
        seed: 7,
        ..SynthSpec::default()
    }
}

fn pixel_area_m2(spec: &SynthSpec) -> f64 {
    let p = spec.distance_pc * PC * spec.pixel_arcsec * ARCSEC;
    p * p
}

/// Half size [px] of a box that holds a core's whole contribution: its truncation radius plus
/// the beam kernel (7 sigma) plus margin.
fn box_half(spec: &SynthSpec, core: &CoreSpec) -> usize {
    let r_px = core.radius_pc * PC / (spec.distance_pc * PC * spec.pixel_arcsec * ARCSEC);
    let extent = match core.profile {
        Profile::Gaussian => 6.0 * r_px,
        Profile::BonnorEbert { .. } => r_px,
    };
    let sigma_b = spec.beam_fwhm_arcsec / spec.pixel_arcsec / (8.0 * 2f64.ln()).sqrt();
    (extent + 7.0 * sigma_b).ceil() as usize + 3
}

/// Sum of (a - b) in a box around (x, y), and the f32 rounding bound of that sum.
fn box_sum(a: &Array2<f32>, b: &Array2<f32>, x: f64, y: f64, half: usize) -> (f64, f64) {
    let (ny, nx) = a.dim();
    let (cx, cy) = (x.round() as i64, y.round() as i64);
    let (mut s, mut bound) = (0.0, 0.0);
    for j in (cy - half as i64).max(0)..=(cy + half as i64).min(ny as i64 - 1) {
        for i in (cx - half as i64).max(0)..=(cx + half as i64).min(nx as i64 - 1) {
            let (u, v) = (
                a[[j as usize, i as usize]] as f64,
                b[[j as usize, i as usize]] as f64,
            );
            s += u - v;
            // Each stored value is within half an f32 ulp (2^-24 relative) of the f64 result.
            bound += (u.abs() + v.abs()) * 2f64.powi(-24);
        }
    }
    (s, bound)
}

#[test]
fn injected_mass_is_exact_up_to_float_rounding() {
    // With the default mean molecular weight and with another one given (`--mu-h2`).
    for mu in [MU_H2, 2.33] {
        injected_mass_is_exact_with(SynthSpec {
            mu_h2: mu,
            ..base_spec()
        });
    }
}

fn injected_mass_is_exact_with(spec: SynthSpec) {
    let with = generate(&spec).unwrap();
    let without = generate(&SynthSpec {
        cores: vec![],
        ..spec.clone()
    })
    .unwrap();
    assert_eq!(with.truth.len(), 4);
    let to_msun = 1e4 * pixel_area_m2(&spec) * spec.mu_h2 * M_H / M_SUN; // cm^-2 -> m^-2, x area
    for (core, truth) in spec.cores.iter().zip(&with.truth) {
        let (s, bound) = box_sum(
            &with.data,
            &without.data,
            core.x,
            core.y,
            box_half(&spec, core),
        );
        let mass = s * to_msun;
        let tol = bound * to_msun + 1e-12 * truth.mass_msun;
        assert!(
            (mass - truth.mass_msun).abs() <= tol,
            "core {}: map holds {mass} M_sun, truth {} M_sun, rounding bound {tol}",
            truth.id,
            truth.mass_msun
        );
        assert!(
            tol < 1e-5 * truth.mass_msun,
            "bound {tol} is tight enough to mean something"
        );
        eprintln!(
            "core {}: relative mass error {:.2e} (bound {:.2e})",
            truth.id,
            (mass - truth.mass_msun).abs() / truth.mass_msun,
            tol / truth.mass_msun
        );
    }
}

#[test]
fn injected_mass_is_recovered_within_the_noise() {
    let noisy = SynthSpec {
        noise_rms: 2.0e20,
        ..base_spec()
    };
    let with = generate(&noisy).unwrap();
    let clean_bg = generate(&SynthSpec {
        cores: vec![],
        noise_rms: 0.0,
        ..noisy.clone()
    })
    .unwrap();
    let to_msun = 1e4 * pixel_area_m2(&noisy) * MU_H2 * M_H / M_SUN;
    let mut pulls = Vec::new();
    for (core, truth) in noisy.cores.iter().zip(&with.truth) {
        let half = box_half(&noisy, core);
        let (s, _) = box_sum(&with.data, &clean_bg.data, core.x, core.y, half);
        // White noise is added after convolution: independent pixels, so the box sum has
        // rms = noise_rms * sqrt(number of pixels) (the box may be clipped at the edges, so
        // this is an upper bound).
        let npix = ((2 * half + 1) * (2 * half + 1)) as f64;
        let sigma = noisy.noise_rms * npix.sqrt() * to_msun;
        pulls.push((s * to_msun - truth.mass_msun) / sigma);
        assert!(
            (s * to_msun - truth.mass_msun).abs() < 5.0 * sigma,
            "core {}: {} vs {} (sigma {sigma})",
            truth.id,
            s * to_msun,
            truth.mass_msun
        );
    }
    // The noise is really there: not every pull is zero.
    assert!(pulls.iter().any(|p| p.abs() > 1e-3), "pulls {pulls:?}");
}

/// One small Gaussian core on an empty sky (no background, no noise), 30" beam (2.1 px sigma).
fn edge_core(nx: usize, x: f64) -> SynthSpec {
    SynthSpec {
        nx,
        ny: 80,
        beam_fwhm_arcsec: 30.0,
        background: None,
        cores: vec![CoreSpec {
            x,
            y: 40.3,
            mass_msun: 2.0,
            // 0.27 px (HWHM): its stamp, 6 HWHM plus a pixel, lies inside the map at x = 2.7,
            // so only the beam carries light beyond the edge.
            radius_pc: 0.002,
            profile: Profile::Gaussian,
        }],
        ..base_spec()
    }
}

#[test]
fn a_core_near_an_edge_does_not_wrap_round_and_loses_what_the_beam_carries_off() {
    let (nx, shift) = (96, 40);
    let near = generate(&edge_core(nx, 2.7)).unwrap();
    // Hand calculation: the core's stamp spans columns 0 to ceil(2.7 + 6 x 0.275 + 1) = 6; a
    // linear convolution by a kernel of ceil(7 x 2.12) = 15 pixels each side carries it no
    // farther than x = 21: the far edge, and everything beyond x = 21, is exactly zero (a
    // periodic convolution put the core's wrapped light there).
    for ((_, x), v) in near.data.indexed_iter() {
        if x > 21 {
            assert_eq!(*v, 0.0, "x {x}");
        }
    }
    // The same core on a map wider by `shift` pixels on the left, at the same place relative to
    // the right edge: nothing falls off there, and the part of it that lies on the first map's
    // window is what the first map must hold.
    let wide = generate(&edge_core(nx + shift, 2.7 + shift as f64)).unwrap();
    let total = |a: &Array2<f32>, x0: usize| -> (f64, f64) {
        let mut s = 0.0;
        let mut bound = 0.0;
        for ((_, x), &v) in a.indexed_iter() {
            if x >= x0 {
                s += v as f64;
                bound += (v as f64).abs() * 2f64.powi(-24);
            }
        }
        (s, bound)
    };
    let (held, b1) = total(&near.data, 0);
    let (inside, b2) = total(&wide.data, shift);
    let (all, b3) = total(&wide.data, 0);
    let to_msun = 1e4 * pixel_area_m2(&base_spec()) * MU_H2 * M_H / M_SUN;
    // The wide map holds the whole core (its mass, exact on the grid before a unit-sum beam).
    assert_close(all * to_msun, 2.0, 1e-6, 0.0, "the wide map holds the core");
    assert!(
        (held - inside).abs() <= b1 + b2 + 1e-12 * all,
        "map total {held} vs the wide map's part inside the window {inside}"
    );
    // Something did fall off (about Phi(-3.2 / 2.15) = 7%), so the check above means something.
    let lost = 1.0 - held / all;
    eprintln!("fraction beyond the edge {lost:.4}");
    assert!(lost > 0.02 && lost < 0.15, "lost fraction {lost}");
    assert!(b3 < 1e-6 * all);
    // The truth records the core's whole mass, and its peak as the map shows it.
    assert_eq!(near.truth[0].mass_msun, 2.0);
    let max = near.data.iter().cloned().fold(f32::MIN, f32::max) as f64;
    assert_close(max, near.truth[0].peak, 1e-6, 0.0, "peak near the edge");
}

#[test]
fn truth_peak_matches_the_map_for_an_isolated_core() {
    let spec = SynthSpec {
        background: None,
        cores: vec![base_spec().cores[1]],
        ..base_spec()
    };
    let map = generate(&spec).unwrap();
    let max = map.data.iter().cloned().fold(f32::MIN, f32::max) as f64;
    let t = &map.truth[0];
    assert_close(
        max,
        t.peak,
        1e-6,
        0.0,
        "beam-convolved peak (f32 map vs f64 truth)",
    );
    assert!(t.peak < t.peak_column_cm2, "the beam lowers the peak");
    assert_eq!(t.peak_unit, "cm-2");
}

/// Self-consistency, not an outside reference: a round trip through cairn's own code. The
/// generator turns column density into intensity with cairn's I = N mu_H2 m_H kappa_nu B_nu(T)
/// (src/synth.rs, the expression of `physics::intensity_from_column`), and this test turns the
/// map back into a mass with cairn's `physics::dust_mass`, M = S d^2 / (kappa_nu B_nu(T)) (both
/// after Hildebrand 1983), sharing the opacity law and the Planck function. It shows that the
/// two agree with each other and with the beam area and flux sum used here, not that either is
/// right: the outside checks of `dust_mass` and of the Planck function are in
/// tests/physics_reference.rs (astropy 8.0.2).
#[test]
fn dust_emission_map_gives_back_the_mass_through_dust_mass() {
    // Jy/beam map of one core: flux = sum / (beam area in pixels); physics::dust_mass must
    // return the injected mass.
    let (lambda_um, t_k) = (850.0, 15.0);
    let opacity = DustOpacity::default();
    let spec = SynthSpec {
        background: None,
        cores: vec![base_spec().cores[0]],
        output: Output::DustEmission {
            wavelength_um: lambda_um,
            temperature_k: t_k,
            unit: EmissionUnit::JyPerBeam,
            opacity,
        },
        ..base_spec()
    };
    let map = generate(&spec).unwrap();
    let h = &map.header;
    assert_eq!(h.get_str("BUNIT"), Some("Jy/beam"));
    assert_close(
        h.get_f64("WAVELEN").unwrap(),
        850e-6,
        1e-15,
        0.0,
        "WAVELEN [m]",
    );
    assert_close(
        h.get_f64("RESTFRQ").unwrap(),
        C / 850e-6,
        1e-15,
        0.0,
        "RESTFRQ [Hz]",
    );
    assert_close(
        h.get_f64("BMAJ").unwrap(),
        18.0 / 3600.0,
        1e-15,
        0.0,
        "BMAJ [deg]",
    );
    let total: f64 = map.data.iter().map(|&v| v as f64).sum();
    let fwhm_px = spec.beam_fwhm_arcsec / spec.pixel_arcsec;
    let beam_px = std::f64::consts::PI * fwhm_px * fwhm_px / (4.0 * 2f64.ln());
    let flux_jy = total / beam_px;
    let m = physics::dust_mass(
        flux_jy,
        spec.distance_pc * PC,
        C / (lambda_um * 1e-6),
        t_k,
        &opacity,
    );
    assert_close(
        m / M_SUN,
        spec.cores[0].mass_msun,
        1e-6,
        0.0,
        "mass from dust emission",
    );
}

/// `cairn synth --emission` with the dust opacity options: each pixel is the column density
/// the same command makes without `--emission` times mu_H2 m_H kappa(nu) B_nu(T), with
/// kappa(nu) = kappa0 (nu / nu0)^beta (Beckwith et al. 1990's power law) and the Planck law
/// B_nu = 2 h nu^3 / c^2 / (exp(h nu / k T) - 1), written out here from the textbook formulas
/// (the constants are cairn's, checked against astropy 8.0.2 in tests/physics_reference.rs).
#[test]
fn synth_emission_takes_the_dust_opacity_options() {
    use cairn::physics::constants::{H, JY, K_B};
    let dir = tempfile::tempdir().unwrap();
    let common = [
        "--size",
        "96x80",
        "--cores",
        "3",
        "--core-radius",
        "0.02pc,0.04pc",
        "--seed",
        "11",
        "--distance",
        "300pc",
        "-q",
    ];
    let run = |extra: &[&str]| {
        let mut args = vec!["synth"];
        args.extend_from_slice(extra);
        args.extend_from_slice(&common);
        let o = cli::cairn(&args, dir.path());
        assert_eq!(o.code, 0, "{args:?}: {}", o.stderr);
    };
    run(&["-o", "col"]);
    run(&[
        "-o",
        "em",
        "--emission",
        "850um",
        "--temperature",
        "14K",
        "--opacity",
        "0.2cm2/g",
        "--opacity-frequency",
        "500um",
        "--beta",
        "1.8",
    ]);
    // The specification records the law as given.
    let spec: SynthSpec = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("em/synth-spec.json")).unwrap(),
    )
    .unwrap();
    let Output::DustEmission { opacity, .. } = spec.output else {
        panic!("not an emission map: {:?}", spec.output);
    };
    assert_eq!(opacity.kappa0_cm2_per_g, 0.2);
    assert_eq!(opacity.beta, 1.8);
    assert_close(opacity.nu0_hz, C / 500e-6, 1e-15, 0.0, "nu0 [Hz]");
    let load = |p: &str| {
        cairn::map::load(&dir.path().join(p), &cairn::map::LoadOptions::default())
            .unwrap()
            .data
    };
    let (col, em) = (load("col/synth.fits"), load("em/synth.fits"));
    let nu = C / 850e-6;
    // 0.2 cm2/g = 0.02 m2/kg at 500 um.
    let kappa = 0.02 * (nu / (C / 500e-6)).powf(1.8);
    let b_nu = 2.0 * H * nu.powi(3) / (C * C) / ((H * nu / (K_B * 14.0)).exp_m1());
    // cm-2 -> m-2, then W m-2 Hz-1 sr-1 -> MJy/sr.
    let per_column = 1e4 * MU_H2 * M_H * kappa * b_nu / (1e6 * JY);
    let mut checked = 0;
    for (c, e) in col.iter().zip(em.iter()) {
        let want = *c as f64 * per_column;
        // Both maps are f32: half an ulp each (2^-24 relative).
        assert_close(
            *e as f64,
            want,
            2.0 * 2f64.powi(-23),
            0.0,
            "MJy/sr per pixel",
        );
        checked += 1;
    }
    assert_eq!(checked, 96 * 80);
}

#[test]
fn same_spec_gives_identical_bytes_with_one_and_two_threads() {
    let spec = SynthSpec {
        nx: 192,
        ny: 160,
        population: Some(CorePopulation {
            count: 12,
            mass_min_msun: 0.1,
            mass_max_msun: 5.0,
            mass_index: 2.35,
            radius_min_pc: 0.01,
            radius_max_pc: 0.06,
            profile: Profile::Gaussian,
            margin_px: 10.0,
        }),
        output: Output::DustEmission {
            wavelength_um: 500.0,
            temperature_k: 12.0,
            unit: EmissionUnit::MJyPerSr,
            opacity: DustOpacity::default(),
        },
        noise_rms: 0.5,
        ..base_spec()
    };
    let run = |n: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build()
            .unwrap()
            .install(|| generate(&spec).unwrap())
    };
    let (a, b) = (run(1), run(2));
    let bits = |m: &Array2<f32>| m.iter().map(|v| v.to_bits()).collect::<Vec<u32>>();
    assert_eq!(
        bits(&a.data),
        bits(&b.data),
        "pixel bytes differ between 1 and 2 threads"
    );
    assert_eq!(a.truth, b.truth);
    assert_eq!(a.header, b.header);
    assert_eq!(a.truth.len(), 4 + 12);
    // A different seed gives a different map.
    let c = generate(&SynthSpec {
        seed: spec.seed + 1,
        ..spec.clone()
    })
    .unwrap();
    assert_ne!(bits(&a.data), bits(&c.data));
}

#[test]
fn stored_background_is_current_and_has_the_requested_slope() {
    // (i) fixtures/synth/background.fits (made by `cargo run --example make_synth_fixture`) is
    // byte-identical to what the generator makes now from the stored spec.
    let text = std::fs::read_to_string(fixture_path("synth/background_spec.json")).unwrap();
    let spec: SynthSpec = serde_json::from_str(&text).unwrap();
    let now = generate(&spec).unwrap();
    let mut f = fitsio::FitsFile::open(fixture_path("synth/background.fits")).unwrap();
    let hdu = f.primary_hdu().unwrap();
    let stored: Vec<f32> = hdu.read_image(&mut f).unwrap();
    assert_eq!(stored.len(), spec.nx * spec.ny);
    let same = stored
        .iter()
        .zip(now.data.iter())
        .all(|(a, b)| a.to_bits() == b.to_bits());
    assert!(
        same,
        "fixtures/synth/background.fits is stale: rerun the example and the oracle"
    );

    // (ii) Slope of the ring-averaged power spectrum of ln N measured by numpy 2.4.6
    // (tests/oracle/synth_powerspec.py) matches the requested index within 0.1.
    let ps = fixture_json("synth/powerspec.json");
    let requested = spec.background.unwrap().spectral_index;
    assert_eq!(num(&ps["requested_index"]), requested);
    let measured = num(&ps["measured_index"]);
    assert!(
        (measured - requested).abs() < 0.1,
        "measured {measured}, requested {requested}"
    );
}

#[test]
fn tan_world_coordinates_match_astropy_wcs() {
    // Source: astropy 8.0.2 astropy.wcs all_pix2world on the stored map's header
    // (fixtures/synth/wcs.json); agreement to 1e-9 deg (4 micro-arcsec).
    let text = std::fs::read_to_string(fixture_path("synth/background_spec.json")).unwrap();
    let spec: SynthSpec = serde_json::from_str(&text).unwrap();
    let w = fixture_json("synth/wcs.json");
    let pix = w["pixels"].as_array().unwrap();
    let world = w["world_deg"].as_array().unwrap();
    assert_eq!(pix.len(), world.len());
    for (p, wd) in pix.iter().zip(world) {
        let (p, wd) = (nums(p), nums(wd));
        let (lon, lat) = pixel_to_world(&spec, p[0], p[1]);
        assert_close(lon, wd[0], 0.0, 1e-9, &format!("lon at pixel {p:?}"));
        assert_close(lat, wd[1], 0.0, 1e-9, &format!("lat at pixel {p:?}"));
    }
}

#[test]
fn truth_csv_names_units_and_lists_every_core() {
    let map = generate(&SynthSpec {
        nx: 96,
        ny: 96,
        cores: base_spec().cores[..1].to_vec(),
        ..base_spec()
    })
    .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("truth.csv");
    write_truth_csv(&path, &map.truth).unwrap();
    let text = std::fs::read_to_string(&path).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert!(lines[0].starts_with('#') && lines[0].contains("M_sun") && lines[0].contains("cm-2"));
    assert!(lines[1].starts_with("id,x,y,lon_deg,lat_deg,mass_msun"));
    assert_eq!(lines.len(), 2 + map.truth.len());
    let fields: Vec<&str> = lines[2].split(',').collect();
    assert_eq!(fields[0], "1");
    assert_eq!(fields[5].parse::<f64>().unwrap(), 1.0);
    assert_eq!(fields[7], "gaussian");
}

#[test]
fn invalid_specs_are_refused_with_a_reason() {
    let e = generate(&SynthSpec {
        distance_pc: -1.0,
        ..base_spec()
    })
    .unwrap_err();
    assert!(e.to_string().contains("distance"), "{e}");
    let e = generate(&SynthSpec {
        beam_fwhm_arcsec: 0.0,
        output: Output::DustEmission {
            wavelength_um: 850.0,
            temperature_k: 15.0,
            unit: EmissionUnit::JyPerBeam,
            opacity: DustOpacity::default(),
        },
        ..base_spec()
    })
    .unwrap_err();
    assert!(e.to_string().contains("beam"), "{e}");
    let mut s = base_spec();
    s.cores[0].x = 500.0;
    assert!(generate(&s).unwrap_err().to_string().contains("outside"));
}

#[test]
#[ignore = "timing of a 4096 x 4096 map; run with --ignored (best with --release)"]
fn large_map_is_fast() {
    let spec = SynthSpec {
        nx: 4096,
        ny: 4096,
        noise_rms: 1e20,
        ..base_spec()
    };
    let t = std::time::Instant::now();
    let map = generate(&spec).unwrap();
    let dt = t.elapsed().as_secs_f64();
    eprintln!("4096 x 4096 map in {dt:.2} s");
    assert_eq!(map.data.dim(), (4096, 4096));
    assert!(dt < 30.0, "took {dt} s");
}

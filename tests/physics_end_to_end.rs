//! Masses recovered end to end on synthetic maps (made by cairn's `synth`: a consistency check
//! of loading, segmentation, unit conversion and mass sums, with the injected masses as truth):
//! isolated cores with peak S/N >= 20 within 15% from a column-density map and within 20% from
//! an 850 um emission map at the known temperature; an extinction map made from the same
//! column densities gives the same masses.

use cairn::hierarchy::Connectivity;
use cairn::inspect::NoiseChoice;
use cairn::score::{Context, Field};
use cairn::segment::{Area, Level, SegmentOptions};
use cairn::synth::{self, CorePopulation, EmissionUnit, Output, Profile, SynthSpec};

const DISTANCE_PC: f64 = 280.0;
const BEAM_PX: f64 = 3.0;

fn spec(output: Output, noise: f64) -> SynthSpec {
    SynthSpec {
        nx: 480,
        ny: 480,
        pixel_arcsec: 6.0,
        beam_fwhm_arcsec: 18.0,
        distance_pc: DISTANCE_PC,
        background: None,
        population: Some(CorePopulation {
            count: 40,
            mass_min_msun: 1.0,
            mass_max_msun: 12.0,
            mass_index: 2.0,
            radius_min_pc: 0.01,
            radius_max_pc: 0.03,
            profile: Profile::Gaussian,
            margin_px: 20.0,
        }),
        output,
        noise_rms: noise,
        seed: 31,
        ..SynthSpec::default()
    }
}

fn run(
    dir: &std::path::Path,
    name: &str,
    data: &ndarray::Array2<f32>,
    header: &cairn::header::Header,
    noise: f64,
) -> Vec<(f64, f64, f64)> {
    let path = dir.join(format!("{name}.fits"));
    cairn::fits_write::write_image_f32(&path, data.view(), header, true).unwrap();
    let map = cairn::map::load(&path, &Default::default()).unwrap();
    let out = dir.join(name);
    let o = SegmentOptions {
        floor: Some(Level::Sigma(2.0)),
        prominence: Some(Level::Sigma(5.0)),
        min_area: Some(Area::Beams(0.5)),
        connectivity: Connectivity::Eight,
        grow_leaves: false,
        leaves_only: true,
        noise: NoiseChoice::Value(noise),
        output: out.clone(),
        force: true,
        command_line: vec![],
        physics: Context {
            distance_m: Some(DISTANCE_PC * cairn::physics::constants::PC),
            temperature_k: Some(Field::Uniform(15.0)),
            ..Context::default()
        },
        other_inputs: Vec::new(),
        threshold_texts: Default::default(),
        figure: None,
        label_choice: Default::default(),
    };
    cairn::segment::run(&map, &o, &|_, _| {}).unwrap();
    let text = std::fs::read_to_string(out.join("structures.csv")).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
    let (px, py, m) = (col("peak_x"), col("peak_y"), col("mass"));
    lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[px].parse().unwrap(),
                f[py].parse().unwrap(),
                f[m].parse().unwrap(),
            )
        })
        .collect()
}

/// (truth mass, recovered mass) of isolated cores with peak S/N >= 20 found as one leaf.
fn matched(truth: &[synth::TruthCore], leaves: &[(f64, f64, f64)], noise: f64) -> Vec<(f64, f64)> {
    truth
        .iter()
        .filter(|c| c.peak >= 20.0 * noise)
        .filter(|c| {
            truth.iter().all(|o| {
                o.id == c.id || ((o.x - c.x).powi(2) + (o.y - c.y).powi(2)).sqrt() > 6.0 * BEAM_PX
            })
        })
        .filter_map(|c| {
            let near: Vec<_> = leaves
                .iter()
                .filter(|(x, y, _)| ((x - c.x).powi(2) + (y - c.y).powi(2)).sqrt() <= BEAM_PX)
                .collect();
            (near.len() == 1).then(|| (c.mass_msun, near[0].2))
        })
        .collect()
}

#[test]
fn masses_from_column_density_emission_and_extinction_maps() {
    let dir = tempfile::tempdir().unwrap();
    let noise_col = 1.0e20;
    let col = synth::generate(&spec(Output::ColumnDensity, noise_col)).unwrap();
    let leaves = run(dir.path(), "column", &col.data, &col.header, noise_col);
    let pairs = matched(&col.truth, &leaves, noise_col);
    assert!(
        pairs.len() >= 10,
        "enough isolated bright cores: {}",
        pairs.len()
    );
    let worst = pairs
        .iter()
        .map(|(t, g)| (g / t - 1.0).abs())
        .fold(0.0, f64::max);
    eprintln!(
        "column density: {} cores, worst relative error {worst:.3}",
        pairs.len()
    );
    for (truth, got) in &pairs {
        assert!(
            (got / truth - 1.0).abs() <= 0.15,
            "column-density map: injected {truth} Msun, recovered {got} Msun"
        );
    }

    // The same scene as 850 um dust emission at 15 K, with noise of the same S/N.
    let opacity = cairn::physics::DustOpacity::default();
    let nu = cairn::physics::constants::C / 850e-6;
    let per_column = cairn::physics::intensity_from_column(1.0e4, nu, 15.0, &opacity) / 1e-20; // MJy/sr per cm^-2
    let noise_em = noise_col * per_column;
    let em_out = Output::DustEmission {
        wavelength_um: 850.0,
        temperature_k: 15.0,
        unit: EmissionUnit::MJyPerSr,
        opacity,
    };
    let em = synth::generate(&spec(em_out, noise_em)).unwrap();
    let leaves = run(dir.path(), "emission", &em.data, &em.header, noise_em);
    let pairs_em = matched(&em.truth, &leaves, noise_em);
    assert!(pairs_em.len() >= 10, "{}", pairs_em.len());
    let worst = pairs_em
        .iter()
        .map(|(t, g)| (g / t - 1.0).abs())
        .fold(0.0, f64::max);
    eprintln!(
        "850 um: {} cores, worst relative error {worst:.3}",
        pairs_em.len()
    );
    for (truth, got) in &pairs_em {
        assert!(
            (got / truth - 1.0).abs() <= 0.20,
            "850 um map: injected {truth} Msun, recovered {got} Msun"
        );
    }

    // Extinction: A_V = N(H2) / 9.4e20 (Bohlin, Savage & Drake 1978), same scene and noise.
    let av = col.data.mapv(|v| (v as f64 / 9.4e20) as f32);
    let mut h = col.header.clone();
    h.set("BUNIT", cairn::header::Value::Str("mag".into()), "A_V");
    let leaves_av = run(dir.path(), "extinction", &av, &h, noise_col / 9.4e20);
    let leaves_col = run(dir.path(), "column2", &col.data, &col.header, noise_col);
    assert_eq!(leaves_av.len(), leaves_col.len());
    for (a, c) in leaves_av.iter().zip(&leaves_col) {
        assert_eq!((a.0, a.1), (c.0, c.1), "same leaves");
        assert!(
            (a.2 / c.2 - 1.0).abs() < 1e-5,
            "extinction mass {} vs column mass {}",
            a.2,
            c.2
        );
    }
}

/// The masses of one 850 um map written in MJy/sr and again in each unit of `others` (its
/// BUNIT as written, the canonical unit cairn writes for it, and the MJy/sr in one of it),
/// with its values divided by that factor: the same leaves, and the same masses to the
/// rounding of a pixel to 32 bits (each pixel of the second map is the nearest 32-bit float to
/// the first's divided by the factor, so each pixel's mass, and so each sum of positive
/// pixels, is within half a unit in the last place of a 32-bit float of the first's).
fn masses_equal_those_per_steradian(others: &[(&str, &str, f64)]) {
    let dir = tempfile::tempdir().unwrap();
    let opacity = cairn::physics::DustOpacity::default();
    let nu = cairn::physics::constants::C / 850e-6;
    let per_column = cairn::physics::intensity_from_column(1.0e4, nu, 15.0, &opacity) / 1e-20; // MJy/sr per cm^-2
    let noise = 1.0e20 * per_column;
    let em_out = Output::DustEmission {
        wavelength_um: 850.0,
        temperature_k: 15.0,
        unit: EmissionUnit::MJyPerSr,
        opacity,
    };
    let em = synth::generate(&spec(em_out, noise)).unwrap();
    assert_eq!(em.header.get_str("BUNIT"), Some("MJy/sr"));
    let per_sr = run(dir.path(), "per_sr", &em.data, &em.header, noise);
    assert!(per_sr.len() >= 10, "{}", per_sr.len());

    for (i, &(bunit, canonical, mjy_sr_per_unit)) in others.iter().enumerate() {
        let data = em.data.mapv(|v| (v as f64 / mjy_sr_per_unit) as f32);
        let mut h = em.header.clone();
        h.set("BUNIT", cairn::header::Value::Str(bunit.into()), "");
        let name = format!("other{i}");
        let leaves = run(dir.path(), &name, &data, &h, noise / mjy_sr_per_unit);
        let text = std::fs::read_to_string(dir.path().join(&name).join("structures.csv")).unwrap();
        assert!(
            text.contains(&format!("# parameter unit = {canonical}  (")),
            "{bunit}: unit read"
        );
        assert!(
            text.contains(&format!("# parameter bunit = {bunit}  (")),
            "{bunit}: BUNIT as written"
        );

        assert_eq!(leaves.len(), per_sr.len(), "{bunit}");
        let mut worst: f64 = 0.0;
        for (a, s) in leaves.iter().zip(&per_sr) {
            assert_eq!((a.0, a.1), (s.0, s.1), "{bunit}: same leaves");
            assert!(s.2 > 0.0, "a mass: {}", s.2);
            let rel = (a.2 / s.2 - 1.0).abs();
            worst = worst.max(rel);
            assert!(
                rel <= f32::EPSILON as f64 / 2.0 + 1e-14,
                "{bunit} mass {} vs MJy/sr mass {}",
                a.2,
                s.2
            );
        }
        eprintln!(
            "{bunit}: {} leaves, worst relative difference in mass {worst:.2e}",
            per_sr.len()
        );
    }
}

/// A map in mJy per square arcsecond (BUNIT 'mJy/arcsec**2') holds the same sky as one in
/// MJy/sr with its values divided by 42.54517029615221, the MJy/sr in 1 mJy/arcsec2:
/// 1e-3 Jy / (pi/648000 rad)^2 = 1e-3 (648000/pi)^2 Jy/sr, computed by hand from the
/// arcsecond's definition (BIPM SI Brochure, 8th edition 2006, Table 6); astropy 8.0.2's
/// `(u.mJy / u.arcsec**2).to(u.MJy / u.sr)` gives 42.5451702961522. The two maps give the
/// same leaves and the same masses (`masses_equal_those_per_steradian`).
#[test]
fn masses_from_a_map_per_square_arcsecond_equal_those_per_steradian() {
    masses_equal_those_per_steradian(&[("mJy/arcsec**2", "mJy/arcsec2", 42.54517029615221)]);
}

/// Maps per square arcminute and per square degree (BUNIT 'Jy/arcmin**2', 'deg-2 MJy', and in
/// capitals 'MJY DEG-2') hold the same sky as one in MJy/sr with its values divided by the
/// MJy/sr in one of their unit: 1e-6 (10800/pi)^2 = 11.818102860042279 for Jy/arcmin2 and
/// (180/pi)^2 = 3282.806350011744 for MJy/deg2, computed by hand from the arcminute's and the
/// degree's definitions, pi/10800 and pi/180 rad (BIPM SI Brochure, 8th edition 2006, Table
/// 6); astropy 8.0.2's `(u.Jy / u.arcmin**2).to(u.MJy / u.sr)` gives 11.818102860042279 and
/// `(u.MJy / u.deg**2).to(u.MJy / u.sr)` 3282.8063500117437 (fixtures/segment/reference.json).
/// They give the same leaves and the same masses (`masses_equal_those_per_steradian`).
#[test]
fn masses_from_maps_per_square_arcminute_and_degree_equal_those_per_steradian() {
    masses_equal_those_per_steradian(&[
        ("Jy/arcmin**2", "Jy/arcmin2", 11.818102860042279),
        ("deg-2 MJy", "MJy/deg2", 3282.806350011744),
        ("MJY DEG-2", "MJy/deg2", 3282.806350011744),
    ]);
}

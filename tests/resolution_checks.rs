//! Smoothing to a common linear resolution: the beam measured on a point source equals the
//! target within 0.2% (astropy 8.0.2 Gaussian2D fit, fixtures/resolution/fit.json made by
//! tests/oracle/resolution_astropy.py on cairn's stored output), flux per beam is conserved,
//! and a target finer than the beam is refused.

mod common;
#[allow(dead_code)]
#[path = "common/resolution_fixture.rs"]
mod resolution_fixture;

use common::{fixture_json, fixture_path, num};
use resolution_fixture::{DISTANCE_PC, RESOLUTION_PC};

fn target_arcsec() -> f64 {
    (RESOLUTION_PC / DISTANCE_PC).to_degrees() * 3600.0
}

#[test]
fn the_smoothed_beam_is_the_target_within_a_fifth_of_a_percent() {
    let dir = tempfile::tempdir().unwrap();
    let s = resolution_fixture::smoothed(&dir.path().join("point.fits")).unwrap();
    // The oracle fitted the stored map; it must still be what cairn makes.
    let fresh = dir.path().join("smoothed.fits");
    cairn::fits_write::write_image_f32(&fresh, s.data.view(), &s.header, true).unwrap();
    assert!(
        std::fs::read(&fresh).unwrap()
            == std::fs::read(fixture_path("resolution/smoothed.fits")).unwrap(),
        "re-run the example and the oracle"
    );
    // astropy 8.0.2 Gaussian2D fit (LevMarLSQFitter) of the point source. The stored fit's FWHM
    // is 3.8e-4 (0.04%) above the target on both axes; the tolerance, 2e-3, is about five times
    // that measured difference, so a re-made fit passes while a smoothing kernel 0.3% too wide
    // or too narrow does not (the target is the quadrature sum of the 18-arcsec beam and the
    // kernel, and the kernel carries 89% of the target's square, so a kernel off by 0.3% moves
    // the beam by 0.27%).
    let fit = fixture_json("resolution/fit.json");
    for k in ["fwhm_x_arcsec", "fwhm_y_arcsec"] {
        let got = num(&fit[k]);
        assert!(
            (got / target_arcsec() - 1.0).abs() < 2e-3,
            "{k}: {got} arcsec against the target {}",
            target_arcsec()
        );
    }
    // The map says so too.
    let b = s.beam.unwrap();
    assert!((b.major_deg * 3600.0 / target_arcsec() - 1.0).abs() < 1e-12);
    assert_eq!(s.header.get_f64("BMAJ"), Some(b.major_deg));
}

#[test]
fn flux_per_beam_is_conserved_and_finer_targets_are_refused() {
    use cairn::synth::{CoreSpec, EmissionUnit, Output, Profile, SynthSpec};
    let spec = SynthSpec {
        nx: 120,
        ny: 100,
        background: None,
        cores: vec![CoreSpec {
            x: 60.0,
            y: 50.0,
            mass_msun: 2.0,
            radius_pc: 0.02,
            profile: Profile::Gaussian,
        }],
        output: Output::DustEmission {
            wavelength_um: 850.0,
            temperature_k: 15.0,
            unit: EmissionUnit::JyPerBeam,
            opacity: Default::default(),
        },
        distance_pc: DISTANCE_PC,
        ..SynthSpec::default()
    };
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("em.fits");
    let m = cairn::synth::generate(&spec).unwrap();
    cairn::fits_write::write_image_f32(&p, m.data.view(), &m.header, true).unwrap();
    let map = cairn::map::load(&p, &Default::default()).unwrap();
    let pc = cairn::physics::constants::PC;
    let s = cairn::resolution::to_common_resolution(&map, 0.05 * pc, DISTANCE_PC * pc).unwrap();
    // Total flux = sum of Jy/beam values / beam area in pixels (common practice).
    let flux = |m: &cairn::map::Map| {
        let w = m.wcs.as_ref().unwrap();
        let px = w.pixel_solid_angle(m.nx() as f64 / 2.0, m.ny() as f64 / 2.0);
        m.data
            .iter()
            .filter(|v| v.is_finite())
            .map(|&v| v as f64)
            .sum::<f64>()
            / (m.beam.unwrap().solid_angle_sr() / px)
    };
    let (before, after) = (flux(&map), flux(&s));
    assert!(
        (after / before - 1.0).abs() < 1e-3,
        "flux {before} Jy before, {after} Jy after"
    );
    let e =
        cairn::resolution::to_common_resolution(&map, 0.001 * pc, DISTANCE_PC * pc).unwrap_err();
    assert!(e.message.contains("finer than the map's"), "{e}");
}

//! Checks the injection of cores (`cairn synth --into`) and the scoring of a run against a
//! truth table (`cairn compare --truth`) against outside references stored in
//! `fixtures/inject/`, written by `tests/oracle/inject_astropy.py` (astropy 8.0.2, scipy
//! 1.17.1, numpy 2.4.6) and `tests/oracle/completeness_logit.py` (statsmodels 0.15.0, numpy
//! 2.4.6).

mod common;

use cairn::completeness::{NoLogisticFit, logistic_fit, match_cores, wilson_interval};
use cairn::header::{Header, Value};
use cairn::map::{self, LoadOptions};
use cairn::score::{Context, Field};
use cairn::synth::{CoreSpec, Profile};
use cairn::units::ExtinctionBand;
use common::{assert_close, fixture_json, num};

#[test]
fn wilson_intervals_equal_astropy() {
    // Source: astropy 8.0.2 astropy.stats.binom_conf_interval(k, n,
    // confidence_level=erf(1/sqrt(2)), interval='wilson'), fixtures/inject/wilson.json; that
    // level is z = 1, the 68.27% cairn reports.
    let f = fixture_json("inject/wilson.json");
    assert_close(
        num(&f["confidence_level"]),
        0.682_689_492_137_085_9,
        1e-15,
        0.0,
        "confidence level of one standard deviation",
    );
    let cases = f["cases"].as_array().unwrap();
    assert!(cases.len() >= 10);
    for c in cases {
        let (k, n) = (c["k"].as_u64().unwrap(), c["n"].as_u64().unwrap());
        let (lo, hi) = wilson_interval(k as usize, n as usize, 1.0);
        let what = format!("Wilson interval of {k}/{n} (astropy 8.0.2)");
        assert_close(lo, num(&c["lo"]), 1e-12, 1e-15, &what);
        assert_close(hi, num(&c["hi"]), 1e-12, 1e-15, &what);
    }
}

#[test]
fn logistic_completeness_fits_equal_statsmodels() {
    // Source: statsmodels 0.15.0 Logit(y, [1, log10 M]).fit(method='newton', tol=1e-14)
    // (params, bse, cov_params) with the delta method in numpy 2.4.6 for the 50% and 90%
    // masses; outcomes drawn with numpy 2.4.6 default_rng; fixtures/inject/completeness_logit.json.
    let f = fixture_json("inject/completeness_logit.json");
    let cases = f["cases"].as_array().unwrap();
    let (mut fitted, mut refused) = (0, 0);
    for c in cases {
        let name = c["name"].as_str().unwrap();
        let masses: Vec<f64> = c["masses"].as_array().unwrap().iter().map(num).collect();
        let found: Vec<bool> = c["recovered"]
            .as_array()
            .unwrap()
            .iter()
            .map(|y| y.as_i64().unwrap() == 1)
            .collect();
        let ours = logistic_fit(&masses, &found);
        if c["fit"].is_null() {
            refused += 1;
            let why = ours.expect_err(name);
            match c["reason"].as_str().unwrap() {
                "separated" => {
                    assert_eq!(
                        why,
                        NoLogisticFit::Separated {
                            heaviest_missed: num(&c["heaviest_missed"]),
                            lightest_recovered: num(&c["lightest_recovered"]),
                        },
                        "{name}"
                    );
                    assert!(why.to_string().contains(&format!(
                        "separated in mass: the limit lies between {:.3} and {:.3} Msun",
                        num(&c["heaviest_missed"]),
                        num(&c["lightest_recovered"])
                    )));
                }
                "all_recovered" => {
                    assert_eq!(
                        why,
                        NoLogisticFit::AllRecovered { n: masses.len() },
                        "{name}"
                    )
                }
                other => panic!("{name}: unknown reason {other}"),
            }
            continue;
        }
        fitted += 1;
        let ours = ours.unwrap_or_else(|e| panic!("{name}: {e}"));
        let r = &c["fit"];
        let what = |k: &str| format!("{name}: {k} (statsmodels 0.15.0)");
        for (k, v) in [
            ("a", ours.a),
            ("b", ours.b),
            ("a_err", ours.a_err),
            ("b_err", ours.b_err),
            ("cov_ab", ours.cov_ab),
            ("log10_m50", ours.log10_m50),
            ("log10_m50_err", ours.log10_m50_err),
            ("log10_m90", ours.log10_m90),
            ("log10_m90_err", ours.log10_m90_err),
            ("m50", ours.m50()),
            ("m90", ours.m90()),
        ] {
            assert_close(v, num(&r[k]), 1e-9, 0.0, &what(k));
        }
        assert_eq!(
            ours.m50_extrapolated(),
            r["m50_extrapolated"].as_bool().unwrap(),
            "{}",
            what("m50_extrapolated")
        );
        assert_eq!(
            ours.m90_extrapolated(),
            r["m90_extrapolated"].as_bool().unwrap(),
            "{}",
            what("m90_extrapolated")
        );
        assert_eq!(ours.n, masses.len());
    }
    assert_eq!((fitted, refused), (4, 2));
}

#[test]
fn matching_equals_scipy_assignment_and_astropy_separations() {
    // Source: scipy 1.17.1 linear_sum_assignment on astropy 8.0.2 SkyCoord.separation, on a
    // case whose answer is unique; fixtures/inject/matching.json.
    let f = fixture_json("inject/matching.json");
    let pairs = |k: &str| -> Vec<(f64, f64)> {
        f[k].as_array()
            .unwrap()
            .iter()
            .map(|p| (num(&p[0]), num(&p[1])))
            .collect()
    };
    let (cores, leaves) = (pairs("cores"), pairs("leaves"));
    let m = match_cores(&cores, &leaves, num(&f["radius_arcsec"]));
    let expected = f["match"].as_array().unwrap();
    assert_eq!(m.len(), expected.len());
    let mut matched = 0;
    for (i, (ours, theirs)) in m.iter().zip(expected).enumerate() {
        let t = theirs.as_i64().unwrap();
        match ours {
            Some((j, d)) => {
                assert_eq!(*j as i64, t, "core {i}: leaf (scipy 1.17.1)");
                assert_close(
                    *d,
                    num(&f["separation_arcsec"][i]),
                    1e-9,
                    1e-9,
                    &format!("core {i}: separation (astropy 8.0.2)"),
                );
                matched += 1;
            }
            None => assert_eq!(t, -1, "core {i} unmatched (scipy 1.17.1)"),
        }
    }
    // The case holds both matched and unmatched cores.
    assert!(matched >= 5 && matched < m.len(), "{matched}");
}

/// A map of zeros with a TAN WCS centred on the map, in `bunit`, with the case's beam and
/// wavelength, written to `path`.
fn write_map(path: &std::path::Path, c: &serde_json::Value) {
    let (nx, ny) = (
        c["nx"].as_u64().unwrap() as usize,
        c["ny"].as_u64().unwrap() as usize,
    );
    let pix = num(&c["pixel_arcsec"]) / 3600.0;
    let mut h = Header::new();
    let s = |t: &str| Value::Str(t.into());
    h.set("CTYPE1", s("RA---TAN"), "");
    h.set("CTYPE2", s("DEC--TAN"), "");
    h.set("CRPIX1", Value::Float((nx as f64 + 1.0) / 2.0), "");
    h.set("CRPIX2", Value::Float((ny as f64 + 1.0) / 2.0), "");
    h.set("CRVAL1", Value::Float(84.25), "");
    h.set("CRVAL2", Value::Float(-5.5), "");
    h.set("CDELT1", Value::Float(-pix), "");
    h.set("CDELT2", Value::Float(pix), "");
    h.set("RADESYS", s("ICRS"), "");
    h.set("BUNIT", s(c["bunit"].as_str().unwrap()), "");
    h.set(
        "BMAJ",
        Value::Float(num(&c["beam_major_arcsec"]) / 3600.0),
        "",
    );
    h.set(
        "BMIN",
        Value::Float(num(&c["beam_minor_arcsec"]) / 3600.0),
        "",
    );
    h.set("BPA", Value::Float(num(&c["beam_pa_deg"])), "");
    if let Some(w) = c.get("wavelength_um") {
        h.set("WAVELEN", Value::Float(num(w) * 1e-6), "");
    }
    let data = ndarray::Array2::<f32>::zeros((ny, nx));
    cairn::fits_write::write_image_f32(path, data.view(), &h, false).unwrap();
}

#[test]
fn an_injected_core_holds_its_mass_in_the_map_unit_by_astropy() {
    // Source: astropy 8.0.2 units, constants and BlackBody (fixtures/inject/injected_sums.json):
    // the sum over the map of one core's contribution is its mass turned into N(H2) on pixels
    // of |CDELT1 CDELT2| at the distance, then into the map's unit.
    let f = fixture_json("inject/injected_sums.json");
    let dir = tempfile::tempdir().unwrap();
    let cases = f["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 6);
    for (i, c) in cases.iter().enumerate() {
        let path = dir.path().join(format!("case{i}.fits"));
        write_map(&path, c);
        let band = if c["band"] == "K" {
            ExtinctionBand::K
        } else {
            ExtinctionBand::V
        };
        let mut m = map::load(
            &path,
            &LoadOptions {
                band,
                ..LoadOptions::default()
            },
        )
        .unwrap();
        let ctx = Context {
            distance_m: Some(num(&c["distance_pc"]) * cairn::physics::constants::PC),
            temperature_k: c.get("temperature_k").map(|t| Field::Uniform(num(t))),
            ..Context::default()
        };
        let core = CoreSpec {
            x: (m.nx() as f64 - 1.0) / 2.0,
            y: (m.ny() as f64 - 1.0) / 2.0,
            mass_msun: num(&c["mass_msun"]),
            radius_pc: num(&c["radius_pc"]),
            profile: Profile::Gaussian,
        };
        let (data, truth, sums) =
            cairn::inject::inject_at(&mut m, &ctx, &[core], num(&c["distance_pc"])).unwrap();
        let what = format!("case {i} ({}): injected sum (astropy 8.0.2)", c["bunit"]);
        let expected = num(&c["sum"]);
        assert_close(sums[0], expected, 1e-9, 0.0, &what);
        // The map itself (32-bit floats on a map of zeros) holds the same.
        let in_map: f64 = data.iter().map(|&v| v as f64).sum();
        assert_close(in_map, expected, 1e-5, 0.0, &format!("{what}, in the map"));
        // The truth is in the map's frame: the centre of a TAN map is CRVAL.
        assert_close(truth[0].lon_deg, 84.25, 1e-12, 1e-12, "truth longitude");
        assert_close(truth[0].lat_deg, -5.5, 1e-12, 1e-12, "truth latitude");
        // The peak of the convolved core is its largest pixel in the map.
        let peak = data.iter().cloned().fold(f32::MIN, f32::max) as f64;
        assert_close(peak, truth[0].peak, 1e-6, 0.0, "truth peak in the map");
    }
}

#[test]
fn a_plane_of_a_cube_keeps_its_wavelength_in_the_injected_map_as_astropy_gives_it() {
    // Source: astropy 8.0.2 WCS.spectral.pixel_to_world of each plane
    // (fixtures/fits/spectral.json, written by tests/oracle/fits_astropy.py): the header of
    // the 2-D copy that synth --into writes of one plane must give that plane's wavelength.
    let v = fixture_json("fits/spectral.json");
    assert_eq!(v["astropy"], "8.0.2");
    let dir = tempfile::tempdir().unwrap();
    for name in ["cube_freq.fits", "cube_wave.fits", "cube_freqlog.fits"] {
        let r = &v["files"][name];
        let planes = common::nums(&r["planes"]);
        assert!(planes.len() >= 3, "{name}");
        for (i, &p) in planes.iter().enumerate() {
            let opts = LoadOptions {
                plane: Some(p as usize),
                ..LoadOptions::default()
            };
            let m = map::load(&common::fixture_path(&format!("fits/{name}")), &opts).unwrap();
            let out = dir.path().join(format!("{name}-{p}.fits"));
            cairn::fits_write::write_image_f32(
                &out,
                m.data.view(),
                &cairn::inject::image_header(&m),
                false,
            )
            .unwrap();
            let copy = map::load(&out, &LoadOptions::default()).unwrap();
            let reference = if name == "cube_wave.fits" {
                num(&r["wavelength_m"][i])
            } else {
                cairn::units::C_LIGHT / num(&r["frequency_hz"][i])
            };
            assert_close(
                copy.wavelength_m.unwrap_or(f64::NAN),
                reference,
                1e-12,
                0.0,
                &format!("{name} plane {p} copied (astropy 8.0.2)"),
            );
            assert_eq!(copy.data, m.data, "{name} plane {p}: the pixels");
        }
    }
}

//! The catalogue and label maps of `cairn segment` against scikit-image and astropy.
//!
//! fixtures/segment/ holds a synthetic map and cairn's stored run on it; the reference values
//! in fixtures/segment/reference.json come from tests/oracle/segment_skimage.py:
//! scikit-image 0.26.0 `regionprops` on cairn's own label map, and astropy 8.0.2
//! `WCS.all_pix2world` of cairn's catalogue pixel positions, `SkyCoord` for their galactic
//! coordinates, sizes, position angles and masses by its own methods, beam-deconvolved moment
//! sizes from numpy's moments and astropy's local pixel scale matrix, and `astropy.io.votable`
//! on the stored VOTable. The catalogue of grown leaves (`structures-grown.csv`) is checked the
//! same way against `regionprops` on cairn's grown label plane (`leaves-grown.fits`).

mod common;
#[allow(dead_code)]
#[path = "common/segment_fixture.rs"]
mod segment_fixture;

use std::collections::HashMap;

use cairn::hierarchy::{self, Params};
use cairn::map::{self, LoadOptions};
use common::{assert_close, field as f, fixture_json, fixture_path, num, read_csv};
use segment_fixture::catalogue_files;

#[test]
fn stored_run_is_what_cairn_makes_now() {
    // The oracle measured the stored run; it must still be cairn's output, byte for byte.
    let m = map::load(&fixture_path("segment/map.fits"), &LoadOptions::default()).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    cairn::segment::run(&m, &segment_fixture::fixture_options(&out), &|_, _| {}).unwrap();
    for name in [
        "structures.csv",
        "structures.fits",
        "structures.vot",
        "labels.fits",
        "leaves-grown.fits",
        "structures-grown.csv",
        "structures-grown.fits",
        "structures-grown.vot",
        "hierarchy.json",
        "hierarchy.dot",
    ] {
        let fresh = std::fs::read(out.join(name)).unwrap();
        let stored = std::fs::read(fixture_path(&format!("segment/run/{name}"))).unwrap();
        assert!(
            fresh == stored,
            "{name} differs from fixtures/segment/run/{name}: re-run the example and the oracle"
        );
    }
}

/// A catalogue row's area, value-weighted centroid and weighted moment axes against
/// scikit-image 0.26.0 regionprops of the same pixels (`r`, from tests/oracle/segment_skimage.py):
/// area, weighted centroid, and the weighted covariance (moments_weighted_central / mu00)
/// whose eigenvalues are sigma_major_px^2 and sigma_minor_px^2.
fn check_weighted_props(
    row: &HashMap<String, String>,
    r: &serde_json::Value,
    what: &dyn Fn(&str) -> String,
) {
    assert_eq!(f(row, "area_px"), num(&r["area"]), "{}", what("area"));
    assert_close(
        f(row, "x"),
        num(&r["weighted_col"]),
        1e-12,
        1e-9,
        &what("weighted centroid x"),
    );
    assert_close(
        f(row, "y"),
        num(&r["weighted_row"]),
        1e-12,
        1e-9,
        &what("weighted centroid y"),
    );
    let (a, b, c) = (num(&r["cov_cc"]), num(&r["cov_rc"]), num(&r["cov_rr"]));
    let mean = 0.5 * (a + c);
    let half = (0.25 * (a - c) * (a - c) + b * b).sqrt();
    assert_close(
        f(row, "sigma_major_px"),
        (mean + half).sqrt(),
        1e-9,
        1e-9,
        &what("sigma_major_px"),
    );
    assert_close(
        f(row, "sigma_minor_px"),
        (mean - half).max(0.0).sqrt(),
        1e-9,
        1e-9,
        &what("sigma_minor_px"),
    );
}

#[test]
fn catalogue_matches_regionprops_on_cairns_label_map() {
    let reference = fixture_json("segment/reference.json");
    let rp = reference["regionprops"].as_object().unwrap();
    let rows = read_csv(&fixture_path("segment/run/structures.csv"));
    assert_eq!(rows.len(), rp.len());
    assert!(rows.iter().any(|r| r["kind"] == "leaf") && rows.iter().any(|r| r["kind"] == "branch"));
    // The unweighted sums come from the library's hierarchy with the run's thresholds.
    let m = map::load(&fixture_path("segment/map.fits"), &LoadOptions::default()).unwrap();
    let params = Params {
        floor: 3.2e21,
        prominence: 6.0e20,
        min_area: 4,
        connectivity: hierarchy::Connectivity::Eight,
    };
    let h = hierarchy::build(m.data.view(), &params).unwrap();
    for row in &rows {
        let id = &row["id"];
        let r = &rp[id.as_str()];
        let what = |k: &str| format!("structure {id} {k}");
        check_weighted_props(row, r, &what);
        let (a, b, c) = (num(&r["cov_cc"]), num(&r["cov_rc"]), num(&r["cov_rr"]));
        let phi = f(row, "angle_px").to_radians();
        let expected = 0.5 * (2.0 * b).atan2(a - c);
        assert!(
            ((phi - expected).sin()).abs() < 1e-9,
            "{}: {phi} vs {expected}",
            what("angle_px")
        );
        // regionprops centroid, orientation and axis lengths (unweighted) against the same
        // structure's unweighted sums in cairn's hierarchy.
        let s = &h.structures[id.parse::<usize>().unwrap()];
        let (ux, uy) = s.sums.centroid();
        assert_close(
            ux,
            num(&r["centroid_col"]),
            1e-12,
            1e-9,
            &what("centroid x"),
        );
        assert_close(
            uy,
            num(&r["centroid_row"]),
            1e-12,
            1e-9,
            &what("centroid y"),
        );
        let (cxx, cxy, cyy) = s.sums.covariance();
        let e = cairn::measure::ellipse(cxx, cxy, cyy);
        // regionprops axis lengths are 4 standard deviations.
        assert_close(
            4.0 * e.sigma_major,
            num(&r["axis_major_length"]),
            1e-9,
            1e-9,
            &what("axis_major_length"),
        );
        assert_close(
            4.0 * e.sigma_minor,
            num(&r["axis_minor_length"]),
            1e-9,
            1e-7,
            &what("axis_minor_length"),
        );
        if (e.sigma_major - e.sigma_minor) > 1e-6 {
            // regionprops orientation o: major axis along (column, row) = (sin o, cos o).
            let dot =
                e.angle.cos() * num(&r["major_dir_col"]) + e.angle.sin() * num(&r["major_dir_row"]);
            assert!(
                (dot.abs() - 1.0).abs() < 1e-9,
                "{}: |cos| = {}",
                what("major-axis direction"),
                dot.abs()
            );
        }
    }
}

/// The catalogue's sky sizes, masses and stability columns against astropy 8.0.2 by other
/// methods than cairn's
/// (tests/oracle/segment_skimage.py): the pixel's solid angle as the spherical quadrilateral
/// of its corners (Van Oosterom & Strackee 1983) against cairn's area element of the
/// projection; the weighted covariance of the pixels' own offsets on the sky
/// (`SkyCoord.spherical_offsets_to`) against cairn's pixel covariance carried through the
/// local Jacobian; masses M = mu_H2 m_H d^2 Omega sum N(H2), and the density, Jeans,
/// Bonnor-Ebert, virial and free-fall columns from the oracle's own masses and radii, in
/// astropy's units and constants (formulas and papers in the oracle's docstring), and the
/// deconvolved radius and unresolved flag from the header's beam.
/// The tolerances are those of the methods' differences: the quadrilateral and the area element
/// differ by terms of order the pixel's size squared and cairn's derivative steps (1e-7), the
/// exact offsets and the Jacobian by the curvature of the sky over a structure up to a tenth of
/// a degree across (1e-6 of the major axis).
#[test]
fn grown_catalogue_matches_regionprops_on_cairns_grown_plane() {
    let reference = fixture_json("segment/reference.json");
    let rp = reference["grown_regionprops"].as_object().unwrap();
    let rows = read_csv(&fixture_path("segment/run/structures-grown.csv"));
    let leaves = read_csv(&fixture_path("segment/run/structures.csv"))
        .into_iter()
        .filter(|r| r["kind"] == "leaf")
        .count();
    assert_eq!(rows.len(), leaves, "one row per leaf");
    assert_eq!(rp.len(), leaves);
    for row in &rows {
        let id = &row["id"];
        let r = &rp[id.as_str()];
        let what = |k: &str| format!("grown leaf {id} {k}");
        // scikit-image 0.26.0 regionprops on the pixels of leaves-grown.fits carrying the id.
        check_weighted_props(row, r, &what);
    }
}

#[test]
fn catalogue_sky_sizes_masses_and_stability_match_astropy() {
    let reference = fixture_json("segment/reference.json");
    let phys = reference["physical"].as_object().unwrap();
    let rows = read_csv(&fixture_path("segment/run/structures.csv"));
    assert_eq!(rows.len(), phys.len());
    let mut elongated = 0;
    let mut states = std::collections::BTreeMap::new();
    let mut resolution = std::collections::BTreeMap::new();
    for row in &rows {
        let id = &row["id"];
        let r = &phys[id.as_str()];
        let what = |k: &str| format!("structure {id} {k}");
        for (col, key) in [
            ("area_sky", "area_arcsec2"),
            ("radius", "radius_arcsec"),
            ("mass", "mass_msun"),
            ("mass_excess", "mass_excess_msun"),
            ("radius_pc", "radius_pc"),
            ("density", "density_cm3"),
            ("jeans_length", "jeans_length_pc"),
            ("jeans_mass", "jeans_mass_msun"),
            ("be_mass", "be_mass_msun"),
            ("alpha_be", "alpha_be"),
            ("sigma_v", "sigma_v_kms"),
            ("alpha_vir", "alpha_vir"),
            ("t_ff", "t_ff_yr"),
        ] {
            assert_close(f(row, col), num(&r[key]), 1e-7, 0.0, &what(col));
        }
        // The deconvolved radius (empty when unresolved) and the flag, from astropy's radius
        // and the header's beam by the README's rule.
        let unresolved = r["unresolved"].as_bool().unwrap();
        assert_eq!(
            row["unresolved"],
            unresolved.to_string(),
            "{}",
            what("unresolved")
        );
        if unresolved {
            assert_eq!(row["radius_deconv_pc"], "", "{}", what("radius_deconv_pc"));
        } else {
            assert_close(
                f(row, "radius_deconv_pc"),
                num(&r["radius_deconv_pc"]),
                1e-7,
                0.0,
                &what("radius_deconv_pc"),
            );
        }
        *resolution.entry(unresolved).or_insert(0) += 1;
        // The state from astropy's virial parameter by the catalogue's rule (its note: bound
        // at alpha_vir <= 2, the virial boundary of Bertoldi & McKee 1992, marginal up to 4;
        // common practice).
        let a = num(&r["alpha_vir"]);
        let state = if a <= 2.0 {
            "bound"
        } else if a <= 4.0 {
            "marginal"
        } else {
            "unbound"
        };
        assert_eq!(row["state"], state, "{}", what("state"));
        *states.entry(state).or_insert(0) += 1;
        let major = num(&r["fwhm_major_arcsec"]);
        for (col, key) in [
            ("fwhm_major", "fwhm_major_arcsec"),
            ("fwhm_minor", "fwhm_minor_arcsec"),
        ] {
            assert_close(f(row, col), num(&r[key]), 0.0, 1e-6 * major, &what(col));
        }
        // The position angle east of north, through the covariance it implies (which stays
        // defined for round structures): major axis along (east, north) = (sin pa, cos pa).
        let k = 1.0 / (2.0 * (2.0 * 2f64.ln()).sqrt());
        let (sa, sb) = (f(row, "fwhm_major") * k, f(row, "fwhm_minor") * k);
        let pa = f(row, "pa").to_radians();
        let (u, v) = ((pa.sin(), pa.cos()), (pa.cos(), -pa.sin()));
        let cov = |i: usize, j: usize| {
            let c = |w: (f64, f64), n: usize| if n == 0 { w.0 } else { w.1 };
            sa * sa * c(u, i) * c(u, j) + sb * sb * c(v, i) * c(v, j)
        };
        let tol = 2e-6 * sa * sa;
        for (i, j, key) in [
            (0, 0, "cov_east_east"),
            (0, 1, "cov_east_north"),
            (1, 1, "cov_north_north"),
        ] {
            assert_close(cov(i, j), num(&r[key]), 0.0, tol, &what(key));
        }
        if sb < 0.8 * sa {
            elongated += 1;
            let d = (f(row, "pa") - num(&r["pa_deg"])).rem_euclid(180.0);
            assert!(d.min(180.0 - d) < 1e-3, "{}: {d} deg", what("pa"));
        }
    }
    assert!(elongated >= 3, "only {elongated} elongated structures");
    assert_eq!(states.len(), 3, "every state occurs: {states:?}");
    assert_eq!(
        resolution.len(),
        2,
        "resolved and unresolved structures occur: {resolution:?}"
    );
}

/// Checks a catalogue's beam-deconvolved columns against the oracle's values for one beam;
/// returns how many structures are resolved and how many not.
fn check_deconvolved(
    rows: &[HashMap<String, String>],
    reference: &serde_json::Value,
    beam: &str,
) -> (usize, usize) {
    let (mut resolved, mut unresolved) = (0, 0);
    for row in rows {
        let id = &row["id"];
        let r = &reference[id.as_str()];
        let what = |k: &str| format!("{beam}: structure {id} {k}");
        // The decision must not hang on rounding: every structure's smallest eigenvalue of the
        // difference lies far from zero next to the measured covariance.
        let trace = num(&r["measured_trace_arcsec2"]);
        assert!(
            num(&r["deconv_min_eigenvalue"]).abs() > 1e-6 * trace,
            "{}",
            what("is on the edge of being resolved; the check below cannot decide it")
        );
        if !r["resolved"].as_bool().unwrap() {
            unresolved += 1;
            for col in [
                "fwhm_major_deconv",
                "fwhm_minor_deconv",
                "pa_deconv",
                "radius_moment_pc",
            ] {
                assert_eq!(row[col], "", "{}", what(col));
            }
            continue;
        }
        resolved += 1;
        // The deconvolved covariance implied by cairn's axes and angle (major axis along
        // (east, north) = (sin pa, cos pa)), so that round structures, whose angle says
        // nothing, are checked too.
        let k = 1.0 / (2.0 * (2.0 * 2f64.ln()).sqrt());
        let (sa, sb) = (
            f(row, "fwhm_major_deconv") * k,
            f(row, "fwhm_minor_deconv") * k,
        );
        let pa = f(row, "pa_deconv").to_radians();
        let (u, v) = ([pa.sin(), pa.cos()], [pa.cos(), -pa.sin()]);
        for (i, j, key) in [
            (0, 0, "deconv_cov_east_east"),
            (0, 1, "deconv_cov_east_north"),
            (1, 1, "deconv_cov_north_north"),
        ] {
            let cov = sa * sa * u[i] * u[j] + sb * sb * v[i] * v[j];
            assert_close(cov, num(&r[key]), 0.0, 1e-9 * trace, &what(key));
        }
        for (col, key) in [
            ("fwhm_major_deconv", "fwhm_major_deconv_arcsec"),
            ("fwhm_minor_deconv", "fwhm_minor_deconv_arcsec"),
            ("radius_moment_pc", "radius_moment_pc"),
        ] {
            assert_close(f(row, col), num(&r[key]), 1e-8, 0.0, &what(col));
        }
        if sb < 0.9 * sa {
            let d = (f(row, "pa_deconv") - num(&r["pa_deconv_deg"])).rem_euclid(180.0);
            assert!(d.min(180.0 - d) < 1e-6, "{}: {d} deg", what("pa_deconv"));
        }
    }
    (resolved, unresolved)
}

/// The beam-deconvolved moment sizes against numpy and astropy 8.0.2
/// (tests/oracle/segment_skimage.py): numpy's weighted moments of each structure's pixels in
/// cairn's label map, carried to the sky by astropy's local pixel scale matrix at the
/// centroid (`astropy.wcs.utils.local_partial_pixel_derivatives`), minus the beam's covariance
/// from its FWHMs and position angle, with numpy's eigen-decomposition; the moment radius
/// 1.91 d (sigma_maj sigma_min)^(1/2) (Solomon et al. 1987, ApJ 319, 730; Rosolowsky & Leroy
/// 2006, PASP 118, 590) in astropy's units. Once with the map's own circular beam (the stored
/// run), once with the oracle's invented elliptical beam given to cairn as its beam option.
/// Tolerances: the two sides use the same sums and WCS (cairn's agrees with WCSLIB to 1e-9
/// degree, tests/wcs_astropy.rs) differenced over one pixel, and differ by about 2e-11 of the
/// measured covariance; 1e-9 of its trace for the deconvolved covariance and 1e-8 relative
/// for the sizes and radius leave room for other machines' rounding.
#[test]
fn deconvolved_moment_sizes_match_numpy_and_astropy() {
    let reference = fixture_json("segment/reference.json");
    let deconvolved = &reference["deconvolved"];
    let rows = read_csv(&fixture_path("segment/run/structures.csv"));
    let (resolved, unresolved) = check_deconvolved(
        &rows,
        &deconvolved["header_beam"]["structures"],
        "header beam",
    );
    assert!(
        resolved > 0 && unresolved > 0,
        "header beam: {resolved} resolved, {unresolved} not"
    );
    // The elliptical beam, given as `--beam` would give it.
    let b = &deconvolved["elliptical_beam"]["beam"];
    let beam = cairn::map::Beam::from_axes(
        num(&b["major_arcsec"]) / 3600.0,
        num(&b["minor_arcsec"]) / 3600.0,
        num(&b["pa_deg"]),
    );
    let opts = LoadOptions {
        beam: Some(beam),
        ..LoadOptions::default()
    };
    let m = map::load(&fixture_path("segment/map.fits"), &opts).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("run");
    cairn::segment::run(&m, &segment_fixture::fixture_options(&out), &|_, _| {}).unwrap();
    let rows = read_csv(&out.join("structures.csv"));
    let structures = &deconvolved["elliptical_beam"]["structures"];
    let (resolved, unresolved) = check_deconvolved(&rows, structures, "elliptical beam");
    assert!(
        resolved > 0 && unresolved > 0,
        "elliptical beam: {resolved} resolved, {unresolved} not"
    );
    // Among the unresolved, a structure longer than the beam's major axis and wider than its
    // minor axis, but narrower than the beam along the beam's major axis: subtracting the
    // beam axis by axis would have called it resolved.
    let (bmaj, bmin) = (num(&b["major_arcsec"]), num(&b["minor_arcsec"]));
    assert!(
        rows.iter().any(|row| {
            !structures[row["id"].as_str()]["resolved"]
                .as_bool()
                .unwrap()
                && f(row, "fwhm_major") > bmaj
                && f(row, "fwhm_minor") > bmin
        }),
        "no crossed structure under the elliptical beam"
    );
}

#[test]
fn catalogue_sky_positions_match_astropy() {
    let reference = fixture_json("segment/reference.json");
    let rows = read_csv(&fixture_path("segment/run/structures.csv"));
    for row in &rows {
        let r = &reference["sky"][row["id"].as_str()];
        // astropy 8.0.2 WCS.all_pix2world (origin 0) of cairn's own pixel positions.
        for (mine, theirs) in [
            ("ra_peak", "peak_lon"),
            ("dec_peak", "peak_lat"),
            ("ra", "lon"),
            ("dec", "lat"),
            // astropy.coordinates.SkyCoord(...).galactic of astropy's centroid position.
            ("glon", "glon"),
            ("glat", "glat"),
        ] {
            assert_close(
                f(row, mine),
                num(&r[theirs]),
                0.0,
                1e-9,
                &format!("structure {} {mine}", row["id"]),
            );
        }
    }
}

#[test]
fn label_maps_carry_the_maps_sky_coordinates() {
    let m = map::load(&fixture_path("segment/map.fits"), &LoadOptions::default()).unwrap();
    let opts = LoadOptions {
        require_unit: false,
        ..LoadOptions::default()
    };
    let l = map::load(&fixture_path("segment/run/labels.fits"), &opts).unwrap();
    let (w1, w2) = (m.wcs.unwrap(), l.wcs.unwrap());
    for (x, y) in [(0.0, 0.0), (159.0, 127.0), (80.5, 3.25)] {
        let (a, b) = (
            w1.pixel_to_sky(x, y).unwrap(),
            w2.pixel_to_sky(x, y).unwrap(),
        );
        assert!(
            (a.0 - b.0).abs() < 1e-12 && (a.1 - b.1).abs() < 1e-12,
            "({x}, {y}): {a:?} vs {b:?}"
        );
    }
}

/// The VOTable catalogue marks its positions for VO tools: astropy 8.0.2's
/// `astropy.io.votable` reads the same UCDs from the stored run, finds each in the IVOA
/// controlled vocabulary (`check_ucd`), and resolves each position to the frame cairn meant
/// (the map is ICRS; the second-frame centroid is galactic).
#[test]
fn votable_positions_carry_ucds_and_coordinate_systems() {
    let reference = fixture_json("segment/reference.json");
    let refs = reference["votable_ucds"].as_object().unwrap();
    let text = std::fs::read_to_string(fixture_path("segment/run/structures.vot")).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    let systems: HashMap<&str, &str> = doc
        .descendants()
        .filter(|n| n.has_tag_name("COOSYS"))
        .map(|n| (n.attribute("ID").unwrap(), n.attribute("system").unwrap()))
        .collect();
    let mut annotated = Vec::new();
    for field in doc.descendants().filter(|n| n.has_tag_name("FIELD")) {
        let Some(ucd) = field.attribute("ucd") else {
            continue;
        };
        let name = field.attribute("name").unwrap();
        let r = &refs[name];
        assert_eq!(ucd, r["ucd"].as_str().unwrap(), "{name}");
        assert_eq!(r["valid"], true, "{name}: {ucd} is not a valid UCD");
        let system = field.attribute("ref").map(|id| systems[id]);
        assert_eq!(system, r["system"].as_str(), "{name}");
        annotated.push(name.to_string());
    }
    annotated.sort();
    assert_eq!(
        annotated,
        ["dec", "dec_peak", "glat", "glon", "id", "ra", "ra_peak"]
    );
    assert_eq!(systems.get("map_frame"), Some(&"ICRS"));
    assert_eq!(systems.get("second_frame"), Some(&"galactic"));
}

/// The catalogue's units read as a FITS reader reads them: astropy 8.0.2's `astropy.units`
/// (FITS format) parses every TUNIT of the stored FITS table, the VOTable gives each column
/// the same unit, and a sum over pixels divided by the map's unit leaves the pixel, also for
/// map units with a denominator (`Jy/beam`, `MJy/sr`, `Jy/pixel`), where writing the pixel
/// after the unit would put it in the denominator.
#[test]
fn catalogue_units_parse_as_meant() {
    let reference = fixture_json("segment/reference.json");
    let refs = reference["fits_units"].as_object().unwrap();
    let text = std::fs::read_to_string(fixture_path("segment/run/structures.vot")).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    let mut with_unit = 0;
    for field in doc.descendants().filter(|n| n.has_tag_name("FIELD")) {
        let name = field.attribute("name").unwrap();
        match field.attribute("unit").filter(|u| !u.is_empty()) {
            Some(unit) => {
                let r = &refs[name];
                assert_eq!(Some(unit), r["tunit"].as_str(), "{name}");
                with_unit += 1;
            }
            None => assert!(refs.get(name).is_none(), "{name} has a TUNIT only"),
        }
    }
    assert_eq!(with_unit, refs.len());
    for name in ["sum", "excess_sum"] {
        assert_eq!(refs[name]["over_map_unit"], "pix", "{name}");
    }
    // An area in pixels is a square pixel, lengths in pixels a pixel.
    assert_eq!(refs["area_px"]["parsed"], "pix2");
    for name in ["radius_px", "sigma_major_px", "x", "peak_x"] {
        assert_eq!(refs[name]["parsed"], "pix", "{name}");
    }
    let spelled = fixture_json("segment/pixel_sum_units.json");
    let verdicts = &reference["pixel_sum_units_over_map_unit"];
    for (map_unit, sum_unit) in spelled.as_object().unwrap() {
        assert_eq!(
            cairn::units::times_pixel(map_unit),
            sum_unit.as_str().unwrap(),
            "fixtures/segment/pixel_sum_units.json is no longer cairn's spelling"
        );
        assert_eq!(verdicts[map_unit], "pix", "{map_unit}: {sum_unit}");
    }
}

/// The units a catalogue writes for a map whose BUNIT is spelt in any of the ways cairn reads
/// (`mag(AK)`, `JY/BEAM`, `JY BEAM-1`, `MJy/steradian`, `1/cm2`, `Jansky/beam`, `deg-2 Jy`,
/// `1`, ...) are what unit parsers read: astropy 8.0.2's `astropy.units` parses every unit of
/// the columns and parameters, of both catalogues and in all three files, in the FITS format
/// and in the VOUnit one (tests/oracle/segment_skimage.py on
/// fixtures/segment/unit_spellings.json, which this test keeps equal to what cairn writes
/// now). The unit written for the map's values is the unit cairn converts with (astropy's SI
/// scale of it equals cairn's factor, and for a surface brightness per steradian, square
/// arcsecond, square arcminute or square degree so does astropy's factor to MJy/sr) and,
/// where astropy reads the BUNIT as written, the same unit (a ratio of 1); a sum over pixels
/// is that unit times the pixel.
#[test]
fn catalogue_units_of_every_spelling_of_the_map_unit_parse_as_fits_and_vo_units() {
    use cairn::units::{ExtinctionBand, PixelUnit};
    let stored = fixture_json("segment/unit_spellings.json");
    let reference = fixture_json("segment/reference.json");
    let verdicts = &reference["unit_spellings"];
    let spellings: Vec<&String> = stored.as_object().unwrap().keys().collect();
    let mut expected: Vec<&str> = segment_fixture::UNIT_SPELLINGS.to_vec();
    expected.sort();
    assert_eq!(spellings, expected, "re-run the example and the oracle");
    let dir = tempfile::tempdir().unwrap();
    for bunit in segment_fixture::UNIT_SPELLINGS {
        let (read, units) = segment_fixture::catalogue_units(dir.path(), bunit);
        assert_eq!(
            serde_json::json!({
                "unit": read,
                "sum_unit": cairn::units::times_pixel(&read),
                "units": units,
            }),
            stored[bunit],
            "{bunit}: fixtures/segment/unit_spellings.json is no longer what cairn writes; re-run the example and the oracle"
        );
        let v = &verdicts[bunit];
        // The unit read is among those written, so astropy's parsers read its spelling.
        assert!(read.is_empty() || units.contains(&read), "{bunit}: {read}");
        for u in &units {
            for format in ["fits", "vounit"] {
                assert!(
                    v["units"][u][format].is_string(),
                    "{bunit}: astropy 8.0.2 does not read '{u}' as a {format} unit"
                );
            }
        }
        // The unit written is the one cairn converts with (a unit it does not read, such as
        // K km/s, is written as given).
        let to_si = match cairn::units::parse_pixel_unit(bunit, ExtinctionBand::V) {
            Some(
                PixelUnit::ColumnDensity { to_si }
                | PixelUnit::SurfaceBrightness { to_si }
                | PixelUnit::FluxPerBeam { to_si }
                | PixelUnit::FluxPerPixel { to_si },
            ) => Some(Some(to_si)),
            // A magnitude has no SI scale in astropy (a logarithmic unit).
            Some(PixelUnit::Extinction { .. }) => Some(None),
            // The dimensionless 1, written as no unit.
            Some(PixelUnit::Other) => Some(Some(1.0)),
            None => {
                assert_eq!(read, bunit);
                None
            }
        };
        match to_si {
            None => {}
            Some(Some(f)) => assert_close(
                num(&v["unit_si_scale"]),
                f,
                1e-12,
                0.0,
                &format!("{bunit} read as '{read}' (astropy 8.0.2 in SI)"),
            ),
            Some(None) => assert!(v["unit_si_scale"].is_null(), "{bunit}"),
        }
        // A surface brightness in MJy/sr: astropy 8.0.2's `Unit(read).to(u.MJy / u.sr)`.
        match cairn::units::parse_pixel_unit(bunit, ExtinctionBand::V) {
            Some(PixelUnit::SurfaceBrightness { to_si }) => assert_close(
                to_si / (1e6 * cairn::units::JANSKY),
                num(&v["unit_in_mjy_per_sr"]),
                1e-15,
                0.0,
                &format!("{bunit} read as '{read}', in MJy/sr (astropy 8.0.2)"),
            ),
            _ => assert!(v["unit_in_mjy_per_sr"].is_null(), "{bunit}"),
        }
        if !v["bunit_in_unit"].is_null() {
            assert_close(
                num(&v["bunit_in_unit"]),
                1.0,
                1e-12,
                0.0,
                &format!("BUNIT '{bunit}' as astropy 8.0.2 reads it, in '{read}'"),
            );
        }
        assert_eq!(v["sum_over_unit"], "pix", "{bunit}");
    }
    // The spellings the review found: written in the canonical unit, not as given.
    for (bunit, unit) in [
        ("mag(AK)", "mag"),
        ("JY/BEAM", "Jy/beam"),
        ("MJY/SR", "MJy/sr"),
        ("CM-2", "cm-2"),
        ("MJy/steradian", "MJy/sr"),
        ("1/cm2", "cm-2"),
        ("Jansky/beam", "Jy/beam"),
        ("1", ""),
        ("beam-1 Jy", "Jy/beam"),
        ("beam-1 mJy", "mJy/beam"),
        ("sr-1 MJy", "MJy/sr"),
        ("mJy/arcsec**2", "mJy/arcsec2"),
        ("mJy arcsec-2", "mJy/arcsec2"),
        ("JY BEAM-1", "Jy/beam"),
        ("JY.BEAM-1", "Jy/beam"),
        ("BEAM-1 JY", "Jy/beam"),
        ("MJY SR-1", "MJy/sr"),
        ("JY PIXEL-1", "Jy/pixel"),
        ("mJy ARCSEC-2", "mJy/arcsec2"),
        ("Jy/arcmin2", "Jy/arcmin2"),
        ("Jy/arcmin**2", "Jy/arcmin2"),
        ("mJy arcmin-2", "mJy/arcmin2"),
        ("arcmin-2 mJy", "mJy/arcmin2"),
        ("MJy/deg2", "MJy/deg2"),
        ("Jy deg-2", "Jy/deg2"),
        ("deg-2 Jy", "Jy/deg2"),
        ("MJY/DEG2", "MJy/deg2"),
    ] {
        assert_eq!(stored[bunit]["unit"], unit, "{bunit}");
    }
    // The canonical spellings per square arcminute and degree as astropy 8.0.2's FITS and
    // VOUnit parsers read and write them back; and their factors to MJy/sr, 1e-6 (10800/pi)^2
    // and (180/pi)^2 by hand from the arcminute's and the degree's definitions (BIPM SI
    // Brochure, 8th edition 2006, Table 6).
    for (bunit, unit, fits, vounit, in_mjy_sr) in [
        (
            "Jy/arcmin2",
            "Jy/arcmin2",
            "Jy arcmin-2",
            "Jy.arcmin**-2",
            11.818102860042279,
        ),
        (
            "mJy arcmin-2",
            "mJy/arcmin2",
            "mJy arcmin-2",
            "mJy.arcmin**-2",
            0.01181810286004228,
        ),
        (
            "MJy/deg2",
            "MJy/deg2",
            "MJy deg-2",
            "MJy.deg**-2",
            3282.806350011744,
        ),
        (
            "deg-2 Jy",
            "Jy/deg2",
            "Jy deg-2",
            "Jy.deg**-2",
            0.003282806350011744,
        ),
    ] {
        let v = &verdicts[bunit];
        assert_eq!(v["units"][unit]["fits"], fits, "{bunit}");
        assert_eq!(v["units"][unit]["vounit"], vounit, "{bunit}");
        assert_close(
            num(&v["unit_in_mjy_per_sr"]),
            in_mjy_sr,
            1e-15,
            0.0,
            &format!("{bunit}: astropy 8.0.2 against the definition"),
        );
    }
}

/// The stored catalogue's parameters as strict readers take them (astropy 8.0.2, from
/// tests/oracle/segment_skimage.py): the VOTable parses with every warning an error, each
/// PARAM with a unit has one astropy reads as a VOUnit, each FITS keyword is a standard one of
/// at most 8 characters (FITS Standard 4.0 sec. 4.1.2.1) of the type the VOTable gives.
#[test]
fn the_stored_catalogues_parameters_read_as_their_standards_say() {
    let reference = fixture_json("segment/reference.json");
    let run = fixture_path("segment/run");
    let params = catalogue_files::checked_params(&run, "structures");
    let pars = reference["votable_params"].as_object().unwrap();
    let keys = reference["fits_params"].as_object().unwrap();
    assert_eq!((pars.len(), keys.len()), (params.len(), params.len()));
    for (c, card, p) in &params {
        let r = &pars[&c.name];
        assert_eq!(r["datatype"], p.datatype.as_str(), "{}", c.name);
        assert_eq!(p.unit.is_some(), r["unit"].is_string(), "{}", c.name);
        let k = &keys[&card.key];
        assert_eq!(k["standard_keyword"], true, "{}", card.key);
        let fits_type = match p.datatype.as_str() {
            "long" => "int",
            "double" => "float",
            _ => "str",
        };
        assert_eq!(k["type"], fits_type, "{}", card.key);
    }
}

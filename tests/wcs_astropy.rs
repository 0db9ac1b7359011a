//! Sky coordinates (src/wcs) against astropy 8.0.2: astropy.wcs (which wraps WCSLIB) for
//! pixel <-> sky, pixel areas and scales, and astropy.coordinates for frame conversions.
//! Reference values are made by tests/oracle/wcs_astropy.py into fixtures/wcs/.

mod common;

use cairn::header::Header;
use cairn::wcs::{SkyFrame, Wcs, convert_frame};
use common::{fixture_json, num, nums};
use serde_json::Value;

const DEG2_TO_SR: f64 = (std::f64::consts::PI / 180.0) * (std::f64::consts::PI / 180.0);

fn headers() -> Vec<(String, Value)> {
    let all = fixture_json("wcs/projections.json");
    let map = all["headers"].as_object().expect("headers object").clone();
    assert!(map.len() >= 60, "fixture holds {} headers", map.len());
    map.into_iter().collect()
}

fn header_of(entry: &Value) -> Header {
    let cards: Vec<String> = entry["cards"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .collect();
    assert!(
        cards.iter().all(|c| c.len() == 80),
        "cards are 80 characters"
    );
    Header::parse(&cards.concat())
}

fn wcs_of(name: &str, entry: &Value) -> Wcs {
    let h = header_of(entry);
    Wcs::from_header(&h)
        .unwrap_or_else(|e| panic!("{name}: {e}"))
        .unwrap_or_else(|| panic!("{name}: no celestial WCS found"))
}

/// Angular difference in degrees: the longitude difference is taken modulo 360 and scaled by
/// cos(latitude), so that it measures a distance on the sky (and vanishes at a pole, where
/// longitude is undefined).
fn sky_difference(lon: f64, lat: f64, ref_lon: f64, ref_lat: f64) -> f64 {
    let dl = (lon - ref_lon + 540.0).rem_euclid(360.0) - 180.0;
    let c = ref_lat.to_radians().cos();
    (dl * c).abs().max((lat - ref_lat).abs())
}

#[test]
fn pixel_to_sky_matches_astropy_wcs() {
    // Source: astropy 8.0.2 astropy.wcs.WCS.wcs_pix2world (WCSLIB), origin 0; for the headers
    // with SIP polynomials (tan_sip_*) WCS.all_pix2world, which applies them. Tolerance 1e-9
    // degree on the sky (longitude difference modulo 360 scaled by cos(lat)); NaN from astropy
    // (no image in the projection) must be None in cairn and vice versa.
    let mut failures = Vec::new();
    let mut worst: f64 = 0.0;
    let mut compared = 0;
    for (name, e) in headers() {
        let w = wcs_of(&name, &e);
        let (xs, ys, lons, lats) = (
            nums(&e["x"]),
            nums(&e["y"]),
            nums(&e["lon"]),
            nums(&e["lat"]),
        );
        for i in 0..xs.len() {
            let got = w.pixel_to_sky(xs[i], ys[i]);
            match (got, lons[i].is_nan()) {
                (None, true) => {}
                (Some((lon, lat)), false) => {
                    compared += 1;
                    assert!(
                        (0.0..360.0).contains(&lon),
                        "{name}: longitude {lon} outside [0, 360)"
                    );
                    let d = sky_difference(lon, lat, lons[i], lats[i]);
                    worst = worst.max(d);
                    if d > 1e-9 {
                        failures.push(format!(
                            "{name} pixel ({}, {}): cairn ({lon}, {lat}) astropy ({}, {}) diff {d:.2e}",
                            xs[i], ys[i], lons[i], lats[i]
                        ));
                    }
                }
                (g, _) => failures.push(format!(
                    "{name} pixel ({}, {}): cairn {g:?}, astropy ({}, {})",
                    xs[i], ys[i], lons[i], lats[i]
                )),
            }
        }
    }
    eprintln!("pixel -> sky: {compared} points, worst difference {worst:.2e} deg");
    assert!(
        failures.is_empty(),
        "{} failures:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

#[test]
fn sky_to_pixel_round_trips_and_matches_astropy() {
    // Source: astropy 8.0.2 astropy.wcs.WCS.wcs_world2pix (WCSLIB; all_world2pix with a
    // tolerance of 1e-12 pixel for the SIP headers), origin 0, applied to the
    // sky positions astropy computed from the grid pixels. cairn must return the original
    // pixel and astropy's back-converted pixel within 1e-6 pixel.
    let mut failures = Vec::new();
    let mut worst: f64 = 0.0;
    for (name, e) in headers() {
        let w = wcs_of(&name, &e);
        let (xs, ys, lons, lats) = (
            nums(&e["x"]),
            nums(&e["y"]),
            nums(&e["lon"]),
            nums(&e["lat"]),
        );
        let (bx, by) = (nums(&e["back_x"]), nums(&e["back_y"]));
        for i in 0..xs.len() {
            if lons[i].is_nan() {
                continue;
            }
            match w.sky_to_pixel(lons[i], lats[i]) {
                Some((x, y)) => {
                    let d = (x - xs[i]).abs().max((y - ys[i]).abs());
                    let da = (x - bx[i]).abs().max((y - by[i]).abs());
                    worst = worst.max(d).max(da);
                    if d > 1e-6 || da > 1e-6 {
                        failures.push(format!(
                            "{name} ({}, {}): cairn ({x}, {y}), astropy ({}, {})",
                            xs[i], ys[i], bx[i], by[i]
                        ));
                    }
                }
                None => failures.push(format!(
                    "{name} ({}, {}): cairn gives None",
                    lons[i], lats[i]
                )),
            }
        }
    }
    eprintln!("sky -> pixel: worst difference {worst:.2e} pixel");
    assert!(
        failures.is_empty(),
        "{} failures:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

/// Projections whose areal scale at the reference point is 1 for any parameters, so that
/// the solid angle of the reference pixel is |det CD| (Paper II: zenithal projections with
/// R ~ r0 (90 - theta) near the pole, and the cylindrical, pseudo-cylindrical, conic and
/// polyconic ones that are conformal or equal-area with true scale on their reference
/// parallel). The others scale the plane at the reference point by their parameters: AZP
/// by sec(gamma), ZPN by PV_1, AIR by 1/2 - ln(cos xi_b)/tan^2(xi_b), CYP, CEA by lambda,
/// PAR by pi/3 along y, COP, COD, COO by their cone constants.
const UNIT_SCALE_AT_REFERENCE: [&str; 14] = [
    "TAN", "SIN", "STG", "ARC", "ZEA", "SZP", "CAR", "MER", "SFL", "AIT", "MOL", "COE", "BON",
    "PCO",
];

#[test]
fn reference_pixel_solid_angle_matches_astropy() {
    // Sources: (1) astropy 8.0.2 astropy.wcs.utils.proj_plane_pixel_area (deg^2, converted to
    // sr), which is |det CD| and so the solid angle only for UNIT_SCALE_AT_REFERENCE
    // projections; (2) for every header, the five-point difference of astropy's pixel -> sky
    // at the reference pixel ("ref_stencil_sr", accurate to ~1e-11, see
    // tests/oracle/wcs_astropy.py). Both within 1e-9 relative. Where astropy's stencil is NaN
    // (a stencil point without an image) only (1) is used; where the reference pixel itself
    // has no image (ZPN with PV_0 > 0) both codes must give NaN.
    let mut failures = Vec::new();
    let (mut worst, mut worst_stencil): (f64, f64) = (0.0, 0.0);
    let (mut n_area, mut n_stencil) = (0, 0);
    for (name, e) in headers() {
        let w = wcs_of(&name, &e);
        let p = nums(&e["crpix0"]);
        let got = w.pixel_solid_angle(p[0], p[1]);
        if w.pixel_to_sky(p[0], p[1]).is_none() {
            assert!(
                got.is_nan(),
                "{name}: reference pixel has no image but a solid angle {got}"
            );
            continue;
        }
        let stencil = num(&e["ref_stencil_sr"]);
        let area = num(&e["ref_pixel_area_deg2"]) * DEG2_TO_SR;
        let mut check = |reference: f64, what: &str, tol: f64| {
            let rel = (got - reference).abs() / reference;
            let slot = if what.starts_with("stencil") {
                &mut worst_stencil
            } else {
                &mut worst
            };
            *slot = slot.max(rel);
            if rel.is_nan() || rel > tol {
                failures.push(format!(
                    "{name}: cairn {got:e} sr, {what} {reference:e} sr ({rel:.1e})"
                ));
            }
        };
        if UNIT_SCALE_AT_REFERENCE.contains(&w.projection()) {
            check(area, "proj_plane_pixel_area", 1e-9);
            n_area += 1;
        }
        if w.projection() == "AIR" {
            // Paper II eq. 67 near the pole: R = r0 (90 - theta) (1/2 - C), C = ln(cos xi_b) /
            // tan^2(xi_b), xi_b = (90 - theta_b)/2, so the solid angle is |det CD| / (1/2 - C)^2.
            let h = header_of(&e);
            let theta_b = h
                .get_f64(&format!("PV{}_1", 2 - w.lon_axis()))
                .unwrap_or(90.0);
            let xib = ((90.0 - theta_b) / 2.0).to_radians();
            let c: f64 = if xib == 0.0 {
                -0.5
            } else {
                xib.cos().ln() / xib.tan().powi(2)
            };
            check(
                area / (0.5 - c).powi(2),
                "proj_plane_pixel_area / (1/2 - C)^2",
                1e-9,
            );
            n_area += 1;
        }
        if !stencil.is_nan() {
            // WCSLIB inverts AIR iteratively to a tolerance that leaves ~1e-9 relative noise
            // in a 1e-3 rad finite difference, hence the looser bound there.
            let tol = if w.projection() == "AIR" { 1e-8 } else { 1e-9 };
            check(stencil, "stencil on astropy pixel -> sky", tol);
            n_stencil += 1;
        }
    }
    eprintln!(
        "reference-pixel solid angle: {n_area} vs proj_plane_pixel_area (worst relative difference {worst:.2e}), {n_stencil} vs stencil (worst {worst_stencil:.2e})"
    );
    assert!(n_area > 40 && n_stencil > 60, "too few comparisons");
    assert!(
        failures.is_empty(),
        "{} failures:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

#[test]
fn off_reference_solid_angles_and_scales_match_astropy() {
    // Source: five-point central differences (step min(0.5 pixel, 1e-3 rad)) of astropy
    // 8.0.2 astropy.wcs.WCS.wcs_pix2world; that reference is accurate to ~1e-11 relative
    // (truncation O(step^4), round-off ~1e-15 rad / step) except close to a singular edge of
    // a projection (ZPN near its largest zenith distance, where both finite differences lose
    // accuracy, reaching ~5e-9), so 1e-8 relative is asserted for the solid angle (sr) and
    // both pixel scales (deg).
    let mut n = 0;
    let mut worst: f64 = 0.0;
    let mut failures = Vec::new();
    for (name, e) in headers() {
        let w = wcs_of(&name, &e);
        for o in e["off_reference"].as_array().unwrap() {
            let (x, y) = (num(&o["x"]), num(&o["y"]));
            let (sx, sy) = w.pixel_scale(x, y);
            for (what, got, reference) in [
                (
                    "solid angle",
                    w.pixel_solid_angle(x, y),
                    num(&o["solid_angle_sr"]),
                ),
                ("scale along x", sx, num(&o["scale_x_deg"])),
                ("scale along y", sy, num(&o["scale_y_deg"])),
            ] {
                let rel = (got - reference).abs() / reference;
                worst = worst.max(rel);
                if rel.is_nan() || rel > 1e-8 {
                    failures.push(format!("{name} at ({x}, {y}): {what} cairn {got:e}, astropy {reference:e} ({rel:.1e})"));
                }
            }
            n += 1;
        }
    }
    eprintln!(
        "off-reference solid angles and scales: {n} pixels, worst relative difference {worst:.2e}"
    );
    assert!(n > 300, "only {n} off-reference points compared");
    assert!(
        failures.is_empty(),
        "{} failures:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

#[test]
fn frame_and_projection_match_astropy() {
    // Source: astropy 8.0.2 astropy.wcs.utils.wcs_to_celestial_frame (frame, equinox) and
    // WCSLIB's projection code after its own fixes (NCP read as SIN).
    for (name, e) in headers() {
        let w = wcs_of(&name, &e);
        let f = &e["frame"];
        let expected = match f["name"].as_str().unwrap() {
            "icrs" => SkyFrame::Icrs,
            "fk5" => SkyFrame::Fk5 {
                equinox: num(&f["equinox"]),
            },
            "fk4" => SkyFrame::Fk4 {
                equinox: num(&f["equinox"]),
            },
            "galactic" => SkyFrame::Galactic,
            other => panic!("{name}: unexpected frame {other}"),
        };
        assert_eq!(w.frame(), &expected, "{name}");
        let code = e["projection"].as_str().unwrap();
        // astropy names no code for CTYPEs without one (`RA`, `DEC`), which cairn reads, as
        // WCSLIB does, as axes linear in the pixels.
        let code = match code {
            "GLS" => "SFL",
            "" => "linear",
            c => c,
        };
        assert_eq!(w.projection(), code, "{name}");
    }
}

#[test]
fn header_cards_reproduce_the_same_sky() {
    // Source: astropy 8.0.2 astropy.wcs (WCSLIB) pixel -> sky of the original header: a Wcs
    // rebuilt from `header_cards()` must agree with it as closely as the original (1e-9 deg).
    for (name, e) in headers() {
        let w = wcs_of(&name, &e);
        let rebuilt = Wcs::from_header(&Header::from_cards(w.header_cards()))
            .unwrap_or_else(|err| panic!("{name}: {err}"))
            .expect("celestial");
        assert_eq!(rebuilt.frame(), w.frame(), "{name}");
        let (xs, ys, lons, lats) = (
            nums(&e["x"]),
            nums(&e["y"]),
            nums(&e["lon"]),
            nums(&e["lat"]),
        );
        for i in 0..xs.len() {
            match rebuilt.pixel_to_sky(xs[i], ys[i]) {
                Some((lon, lat)) => {
                    let d = sky_difference(lon, lat, lons[i], lats[i]);
                    assert!(
                        d <= 1e-9,
                        "{name} pixel ({}, {}): rebuilt differs by {d:.2e} deg",
                        xs[i],
                        ys[i]
                    );
                }
                None => assert!(
                    lons[i].is_nan(),
                    "{name} pixel ({}, {}): rebuilt gives None",
                    xs[i],
                    ys[i]
                ),
            }
        }
        // The rebuilt header's card images are valid FITS cards.
        let text: String = Header::from_cards(rebuilt.header_cards())
            .to_card_images()
            .concat();
        assert!(
            Wcs::from_header(&Header::parse(&text)).unwrap().is_some(),
            "{name}"
        );
    }
}

#[test]
fn scales_of_a_map_whose_centre_is_off_the_sky_match_astropy() {
    // Source: astropy 8.0.2 astropy.wcs (tests/oracle/wcs_astropy.py, scale_pixel.json): an
    // AIT galactic map with its reference pixel off the map (16% of its pixels on the sky)
    // and an HPX map with its reference pixel on the map, both with the centre off the sky.
    // The pixel where cairn takes the map's scales follows the rule of `Wcs::scale_pixel`
    // (the reference pixel when on the map, else the pixel on the sky nearest it), worked
    // out from astropy's pixel -> sky of every pixel; its position within 1e-9 degree, and
    // the pixel scales and solid angle there within 1e-8 relative of the five-point stencil
    // on astropy's pixel -> sky.
    let f = fixture_json("wcs/scale_pixel.json");
    let maps = f["maps"].as_object().unwrap();
    assert_eq!(maps.len(), 2);
    for (name, e) in maps {
        let w = wcs_of(name, e);
        let (nx, ny) = (num(&e["nx"]) as usize, num(&e["ny"]) as usize);
        let centre = nums(&e["centre_lon_lat"]);
        assert!(
            centre[0].is_nan(),
            "{name}: the centre is off the sky in astropy"
        );
        assert!(
            w.pixel_to_sky((nx as f64 - 1.0) / 2.0, (ny as f64 - 1.0) / 2.0)
                .is_none(),
            "{name}: cairn puts the centre on the sky"
        );
        let (x, y) = w.scale_pixel(nx, ny).expect("a pixel on the sky");
        let want = nums(&e["scale_pixel"]);
        assert_eq!([x, y], [want[0], want[1]], "{name}: scale pixel");
        let (lon, lat) = w.pixel_to_sky(x, y).unwrap();
        let d = sky_difference(lon, lat, num(&e["lon"]), num(&e["lat"]));
        assert!(d <= 1e-9, "{name}: position differs by {d:e} deg");
        let (sx, sy) = w.pixel_scale(x, y);
        for (what, got, reference) in [
            (
                "solid angle",
                w.pixel_solid_angle(x, y),
                num(&e["solid_angle_sr"]),
            ),
            ("scale along x", sx, num(&e["scale_x_deg"])),
            ("scale along y", sy, num(&e["scale_y_deg"])),
        ] {
            let rel = (got - reference).abs() / reference;
            assert!(
                rel <= 1e-8,
                "{name}: {what} cairn {got:e}, astropy {reference:e} ({rel:.1e})"
            );
        }
    }
}

#[test]
fn frame_conversions_match_astropy_coordinates() {
    // Source: astropy 8.0.2 astropy.coordinates.SkyCoord.transform_to between ICRS, Galactic
    // and FK5 (equinox J2000, J1975, J2030), and from FK4 (B1950, B1975) to those; 1e-9
    // degree on the sky (longitude scaled by cos(lat)).
    let f = fixture_json("wcs/frames.json");
    let (lon, lat) = (nums(&f["lon"]), nums(&f["lat"]));
    let frames = [
        ("icrs", SkyFrame::Icrs),
        ("galactic", SkyFrame::Galactic),
        ("fk5", SkyFrame::Fk5 { equinox: 2000.0 }),
        ("fk5_1975", SkyFrame::Fk5 { equinox: 1975.0 }),
        ("fk5_2030", SkyFrame::Fk5 { equinox: 2030.0 }),
    ];
    // Every ordered pair of the frames above, and from FK4 (B1950 and B1975, E-terms
    // included) to each of them; into FK4 is not converted.
    let fk4 = [
        ("fk4", SkyFrame::Fk4 { equinox: 1950.0 }),
        ("fk4_1975", SkyFrame::Fk4 { equinox: 1975.0 }),
    ];
    let mut worst: f64 = 0.0;
    for (a, fa) in frames.iter().chain(&fk4) {
        for (b, fb) in &frames {
            if a == b {
                continue;
            }
            let r = &f[format!("{a}_to_{b}").as_str()];
            let (rl, rb) = (nums(&r["lon"]), nums(&r["lat"]));
            for i in 0..lon.len() {
                let (l2, b2) = convert_frame(lon[i], lat[i], fa, fb).expect("supported frames");
                let d = sky_difference(l2, b2, rl[i], rb[i]);
                worst = worst.max(d);
                assert!(
                    d <= 1e-9,
                    "{a} -> {b} of ({}, {}): cairn ({l2}, {b2}), astropy ({}, {})",
                    lon[i],
                    lat[i],
                    rl[i],
                    rb[i]
                );
            }
        }
    }
    eprintln!("frame conversions: worst difference {worst:.2e} deg");
    assert!(
        convert_frame(
            10.0,
            20.0,
            &SkyFrame::Icrs,
            &SkyFrame::Fk4 { equinox: 1950.0 }
        )
        .is_none()
    );
}

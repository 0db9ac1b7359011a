//! Checks cairn's physics module against outside references stored in `fixtures/physics/`,
//! written by `tests/oracle/physics_astropy.py` (astropy 8.0.2, scipy 1.17.1, numpy 2.4.6).

mod common;

use cairn::physics::constants as k;
use cairn::physics::{self, DustOpacity, LaneEmden};
use common::{assert_close, fixture_json, num, nums};

#[test]
fn constants_equal_astropy_exactly() {
    // Source: astropy 8.0.2 astropy.constants (CODATA 2022, IAU 2015), fixtures/physics/constants.json.
    let f = fixture_json("physics/constants.json");
    assert_eq!(
        f["physical_constants"], "codata2022",
        "astropy's physical constants release"
    );
    assert_eq!(
        f["astronomical_constants"], "iau2015",
        "astropy's astronomical constants release"
    );
    let v = &f["values_si"];
    let pairs = [
        ("G", k::G),
        ("k_B", k::K_B),
        ("h", k::H),
        ("c", k::C),
        ("m_p", k::M_P),
        ("u", k::U),
        ("M_sun", k::M_SUN),
        ("pc", k::PC),
        ("au", k::AU),
        ("m_H", k::M_H),
        // astropy 8.0.2 astropy.cosmology.Planck18.Tcmb0 (Fixsen 2009).
        ("T_cmb", k::T_CMB),
    ];
    for (name, ours) in pairs {
        assert_eq!(ours, num(&v[name]), "constant {name} (astropy 8.0.2)");
    }
    // 1 Jy = 1e-26 W m^-2 Hz^-1 by definition; astropy 8.0.2's unit conversion
    // `u.Jy.to(W m^-2 Hz^-1)` returns 9.999999999999999e-27 (one unit in the last place off,
    // from its scale arithmetic), so this one is compared to 2 ulp.
    assert_close(
        k::JY,
        num(&v["Jy"]),
        4.5e-16,
        0.0,
        "Jy (astropy 8.0.2 units)",
    );
}

#[test]
fn planck_matches_astropy_blackbody() {
    // Source: astropy 8.0.2 astropy.modeling.models.BlackBody; tolerance 1e-10 relative.
    let f = fixture_json("physics/planck.json");
    let rows = f["rows"].as_array().unwrap();
    assert!(rows.len() >= 30);
    for r in rows {
        let (nu, t) = (num(&r["nu_hz"]), num(&r["t_k"]));
        assert_close(
            physics::planck_nu(nu, t),
            num(&r["b_si"]),
            1e-10,
            0.0,
            "B_nu SI",
        );
        assert_close(
            physics::planck_nu_jy_per_sr(nu, t),
            num(&r["b_jy_sr"]),
            1e-10,
            0.0,
            "B_nu Jy/sr",
        );
    }
}

#[test]
fn lane_emden_matches_scipy_solve_ivp() {
    // Source: scipy 1.17.1 solve_ivp (DOP853, rtol 1e-12) of the isothermal Lane-Emden equation
    // (Chandrasekhar 1939); critical values xi_crit ~ 6.451, m_crit ~ 1.182 (Ebert 1955;
    // Bonnor 1956). Brief's tolerance was 1e-4; both solutions agree far better.
    let f = fixture_json("physics/lane_emden.json");
    let le = LaneEmden::standard();
    assert_close(le.xi_crit(), num(&f["xi_crit"]), 1e-9, 0.0, "xi_crit");
    assert_close(le.m_crit(), num(&f["m_crit"]), 1e-10, 0.0, "m_crit");
    assert_close(
        le.critical_mass_coefficient(),
        num(&f["coefficient_c"]),
        1e-10,
        0.0,
        "C in M_BE = C R c_s^2 / G",
    );
    assert_close(
        le.density_ratio(le.xi_crit()),
        num(&f["rho_ratio_crit"]),
        1e-9,
        0.0,
        "rho/rho_c at xi_crit (contrast ~14.1)",
    );
    let xi = nums(&f["xi"]);
    for ((x, r), m) in xi.iter().zip(nums(&f["rho_ratio"])).zip(nums(&f["m"])) {
        assert_close(
            le.density_ratio(*x),
            r,
            1e-10,
            0.0,
            &format!("rho/rho_c at xi={x}"),
        );
        assert_close(
            le.dimensionless_mass(*x),
            m,
            1e-10,
            0.0,
            &format!("m at xi={x}"),
        );
    }
    // The papers' rounded values (Bonnor 1956; Ebert 1955), quoted from memory.
    assert!((le.xi_crit() - 6.451).abs() < 1e-3);
    assert!((le.m_crit() - 1.182).abs() < 1e-3);
}

#[test]
fn jeans_mass_and_length_match_astropy_units() {
    // Source: astropy 8.0.2 units/constants; mu_H2 = 2.8 (Kauffmann et al. 2008), mu_p = 2.33
    // (metal-free H2 and He, common practice).
    let f = fixture_json("physics/jeans.json");
    for r in f["rows"].as_array().unwrap() {
        let t = num(&r["t_k"]);
        let n = num(&r["n_h2_cm3"]) * 1e6;
        let what = format!("T = {t} K, n = {n:e} m^-3");
        assert_close(
            physics::sound_speed(t),
            num(&r["cs_m_s"]),
            1e-12,
            0.0,
            &what,
        );
        assert_close(
            physics::jeans_mass(t, n),
            num(&r["jeans_mass_kg"]),
            1e-10,
            0.0,
            &what,
        );
        assert_close(
            physics::jeans_mass(t, n) / k::M_SUN,
            num(&r["jeans_mass_msun"]),
            1e-10,
            0.0,
            &what,
        );
        assert_close(
            physics::jeans_length(t, n),
            num(&r["jeans_length_m"]),
            1e-10,
            0.0,
            &what,
        );
        assert_close(
            physics::jeans_length(t, n) / k::PC,
            num(&r["jeans_length_pc"]),
            1e-10,
            0.0,
            &what,
        );
    }
}

#[test]
fn dust_mass_worked_example_matches_astropy() {
    // Source: astropy 8.0.2 units + BlackBody; S_850um = 1 Jy, d = 140 pc, T = 15 K, default
    // opacity law (Beckwith et al. 1990; Hildebrand 1983).
    let f = fixture_json("physics/dust_mass.json");
    let nu = k::C / (num(&f["wavelength_um"]) * 1e-6);
    assert_close(nu, num(&f["nu_hz"]), 1e-14, 0.0, "850 um in Hz");
    let op = DustOpacity::default();
    assert_close(
        op.kappa_cm2_per_g(nu),
        num(&f["kappa_cm2_g"]),
        1e-12,
        0.0,
        "kappa_850",
    );
    let m = physics::dust_mass(
        num(&f["flux_jy"]),
        num(&f["distance_pc"]) * k::PC,
        nu,
        num(&f["t_k"]),
        &op,
    );
    assert_close(m, num(&f["mass_kg"]), 1e-10, 0.0, "dust mass [kg]");
    assert_close(
        m / k::M_SUN,
        num(&f["mass_msun"]),
        1e-10,
        0.0,
        "dust mass [M_sun]",
    );
}

"""Outside reference for cairn's physics module (src/physics/).

Run as `python tests/oracle/physics_astropy.py OUTDIR`; writes OUTDIR/physics/*.json.

Sources: astropy 8.0.2 (astropy.constants with its default CODATA 2022 / IAU 2015 releases,
astropy.units, astropy.modeling.models.BlackBody, astropy.cosmology.Planck18's Tcmb0); scipy 1.17.1 (scipy.integrate.solve_ivp,
DOP853, rtol 1e-12) for the isothermal Lane-Emden equation (Chandrasekhar 1939); numpy 2.4.6.

Conventions shared with cairn (stated here because the checks depend on them):
- m_H = 1.008 u (conventional standard atomic weight of hydrogen, IUPAC; value from memory).
- mu_H2 = 2.8 for mass per H2 molecule, mu_p = 2.33 for the sound speed (Kauffmann et al.
  2008, A&A 487, 993, appendix A).
- Dust opacity kappa_nu = 0.1 cm^2/g (nu / 1 THz)^2 per gram of gas (Beckwith et al. 1990;
  Hildebrand 1983).
- Dimensionless Bonnor-Ebert mass m(xi) = (4 pi)^(-1/2) exp(-psi/2) xi^2 psi'(xi)
  (Bonnor 1956); its maximum (dm/dxi = 0, i.e. exp(-psi) = psi'^2/2) defines xi_crit, m_crit;
  C = xi_crit psi'(xi_crit) in M_BE,crit = C R c_s^2 / G.
- Jeans mass M_J = (pi^(5/2)/6) c_s^3 G^(-3/2) rho^(-1/2), Jeans length
  lambda_J = (pi c_s^2 / (G rho))^(1/2), c_s = (k_B T / (mu_p m_H))^(1/2),
  rho = mu_H2 m_H n(H2).
"""
import os

import astropy
import astropy.constants as const
import astropy.units as u
import numpy as np
import scipy
from astropy import astronomical_constants, physical_constants
from astropy.cosmology import Planck18
from astropy.modeling.models import BlackBody
from scipy.integrate import solve_ivp

from common import out_dir, write_json

OUT = out_dir("physics")
M_H = 1.008 * const.u
MU_H2 = 2.8
MU_P = 2.33


def constants():
    names = ["G", "k_B", "h", "c", "m_p", "u", "M_sun", "pc", "au"]
    values = {n: float(getattr(const, n).si.value) for n in names}
    refs = {n: getattr(const, n).reference for n in names}
    values["Jy"] = float(u.Jy.to(u.W / u.m**2 / u.Hz))
    values["m_H"] = float(M_H.si.value)
    # The cosmic microwave background's temperature today, as astropy's Planck 2018
    # cosmology carries it (Fixsen 2009, ApJ 707, 916): the least temperature cairn accepts.
    values["T_cmb"] = float(Planck18.Tcmb0.to(u.K).value)
    write_json(os.path.join(OUT, "constants.json"), {
        "astropy_version": astropy.__version__,
        "physical_constants": physical_constants.get(),
        "astronomical_constants": astronomical_constants.get(),
        "references": refs,
        "values_si": values,
    })


def planck():
    freqs = [1.0e11, 2.3e11, (const.c / (850 * u.um)).to(u.Hz).value, 6.0e11, 1.0e12, 3.0e12]
    temps = [5.0, 10.0, 15.0, 20.0, 35.0, 50.0]
    rows = []
    for t in temps:
        bb = BlackBody(temperature=t * u.K)
        for nu in freqs:
            b = bb(nu * u.Hz)
            rows.append({
                "nu_hz": float(nu),
                "t_k": t,
                "b_si": float(b.to(u.W / u.m**2 / u.Hz / u.sr).value),
                "b_jy_sr": float(b.to(u.Jy / u.sr).value),
            })
    write_json(os.path.join(OUT, "planck.json"), {
        "source": f"astropy {astropy.__version__} astropy.modeling.models.BlackBody",
        "rows": rows,
    })


def lane_emden():
    # psi'' + 2 psi'/xi = exp(-psi); start from the power series at xi0 = 1e-3.
    xi0 = 1e-3

    def series(x):
        x2 = x * x
        return (x2 / 6 - x2**2 / 120 + x2**3 / 1890,
                x / 3 - x**3 / 30 + x**5 / 315)

    def rhs(x, y):
        return [y[1], np.exp(-y[0]) - 2 * y[1] / x]

    def crit(x, y):
        return np.exp(-y[0]) - 0.5 * y[1] ** 2

    crit.terminal = False
    crit.direction = -1
    probe = [0.5, 1.0, 2.0, 3.0, 5.0, 6.5, 10.0, 15.0]
    sol = solve_ivp(rhs, (xi0, 20.0), list(series(xi0)), method="DOP853", rtol=1e-12,
                    atol=1e-14, dense_output=True, events=crit, t_eval=probe)
    xc = float(sol.t_events[0][0])
    psi_c, dpsi_c = sol.y_events[0][0]
    m = lambda x, p, d: (4 * np.pi) ** -0.5 * np.exp(-p / 2) * x * x * d
    write_json(os.path.join(OUT, "lane_emden.json"), {
        "source": f"scipy {scipy.__version__} solve_ivp DOP853 rtol 1e-12 atol 1e-14, "
                  "event exp(-psi) = psi'^2/2",
        "mass_definition": "m = (4 pi)^(-1/2) exp(-psi/2) xi^2 psi'",
        "xi_crit": xc,
        "m_crit": float(m(xc, psi_c, dpsi_c)),
        "rho_ratio_crit": float(np.exp(-psi_c)),
        "coefficient_c": float(xc * dpsi_c),
        "xi": probe,
        "rho_ratio": [float(np.exp(-p)) for p in sol.y[0]],
        "m": [float(m(x, p, d)) for x, p, d in zip(sol.t, sol.y[0], sol.y[1])],
    })


def jeans():
    rows = []
    for t, n in [(10.0, 1e4), (20.0, 1e5), (15.0, 1e3)]:
        temp = t * u.K
        nh2 = n * u.cm**-3
        cs = np.sqrt(const.k_B * temp / (MU_P * M_H))
        rho = MU_H2 * M_H * nh2
        mj = (np.pi ** 2.5 / 6) * cs**3 * const.G**-1.5 * rho**-0.5
        lj = np.sqrt(np.pi * cs**2 / (const.G * rho))
        rows.append({
            "t_k": t, "n_h2_cm3": n,
            "cs_m_s": float(cs.to(u.m / u.s).value),
            "jeans_mass_kg": float(mj.to(u.kg).value),
            "jeans_mass_msun": float(mj.to(u.M_sun).value),
            "jeans_length_m": float(lj.to(u.m).value),
            "jeans_length_pc": float(lj.to(u.pc).value),
        })
    write_json(os.path.join(OUT, "jeans.json"), {
        "source": f"astropy {astropy.__version__} units and constants",
        "rows": rows,
    })


def dust_mass():
    s = 1.0 * u.Jy
    d = 140 * u.pc
    t = 15 * u.K
    lam = 850 * u.um
    nu = lam.to(u.Hz, equivalencies=u.spectral())
    kappa = 0.1 * u.cm**2 / u.g * (nu / (1 * u.THz)).decompose() ** 2
    b = BlackBody(temperature=t)(nu) * u.sr
    m = (s * d**2 / (kappa * b)).to(u.kg)
    write_json(os.path.join(OUT, "dust_mass.json"), {
        "source": f"astropy {astropy.__version__} units, constants, BlackBody",
        "flux_jy": 1.0, "distance_pc": 140.0, "t_k": 15.0, "wavelength_um": 850.0,
        "nu_hz": float(nu.to(u.Hz).value),
        "kappa_cm2_g": float(kappa.to(u.cm**2 / u.g).value),
        "mass_kg": float(m.value),
        "mass_msun": float(m.to(u.M_sun).value),
    })


if __name__ == "__main__":
    constants()
    planck()
    lane_emden()
    jeans()
    dust_mass()

"""Outside reference for cairn's injection of cores (src/inject.rs) and its scoring against a
truth table (src/completeness.rs).

Run as `python tests/oracle/inject_astropy.py OUTDIR`; writes OUTDIR/inject/*.json.

Sources: astropy 8.0.2 (astropy.stats.binom_conf_interval with interval='wilson';
astropy.units, astropy.constants, astropy.modeling.models.BlackBody; astropy.coordinates
SkyCoord.separation); scipy 1.17.1 (scipy.optimize.linear_sum_assignment); numpy 2.4.6.

Conventions shared with cairn (stated here because the checks depend on them):
- The 68.3% interval is one standard deviation of the normal: confidence level
  erf(1/sqrt(2)) = 0.6826894921370859, for which astropy's kappa = sqrt(2) erfinv(level) = 1.
- m_H = 1.008 u, mu_H2 = 2.8 (Kauffmann et al. 2008); N(H2) = 9.4e20 cm^-2 per mag of A_V
  (Bohlin, Savage & Drake 1978), A_V/A_K = 1/0.112 (Rieke & Lebofsky 1985); dust opacity
  kappa_nu = 0.1 cm^2/g (nu / 1 THz)^beta per gram of gas (Beckwith et al. 1990); Gaussian
  beam solid angle pi/(4 ln 2) theta_maj theta_min.
- A core of mass M at distance d, all of it on pixels of solid angle Omega_pix, holds
  sum N(H2) = M / (mu_H2 m_H d^2 Omega_pix) summed over its pixels; the beam (unit-sum kernel)
  keeps that sum. The core is placed at the reference pixel of a TAN map, where the pixel's
  solid angle is |CDELT1 CDELT2| exactly.
"""
import math
import os

import astropy
import astropy.constants as const
import astropy.units as u
import numpy as np
import scipy
from astropy.coordinates import SkyCoord
from astropy.modeling.models import BlackBody
from astropy.stats import binom_conf_interval
from scipy.optimize import linear_sum_assignment

from common import out_dir, write_json

OUT = out_dir("inject")
M_H = 1.008 * const.u
MU_H2 = 2.8
ONE_SIGMA = math.erf(1.0 / math.sqrt(2.0))


def versions():
    return {"astropy": astropy.__version__, "scipy": scipy.__version__, "numpy": np.__version__}


def wilson():
    cases = [(0, 1), (1, 1), (0, 10), (3, 10), (9, 10), (10, 10), (17, 23), (50, 100),
             (199, 200), (0, 5), (1, 2), (7, 1000)]
    rows = []
    for k, n in cases:
        lo, hi = binom_conf_interval(k, n, confidence_level=ONE_SIGMA, interval="wilson")
        rows.append({"k": k, "n": n, "lo": float(lo), "hi": float(hi)})
    write_json(os.path.join(OUT, "wilson.json"), {
        "versions": versions(),
        "confidence_level": ONE_SIGMA,
        "source": "astropy.stats.binom_conf_interval(k, n, confidence_level, interval='wilson')",
        "cases": rows,
    })


def injected_sums():
    """Sum over the map of one injected core, in the map's unit."""
    cases = [
        {"bunit": "cm-2", "band": "V", "mass_msun": 2.5, "distance_pc": 300.0},
        {"bunit": "mag", "band": "V", "mass_msun": 4.0, "distance_pc": 140.0},
        {"bunit": "mag", "band": "K", "mass_msun": 4.0, "distance_pc": 140.0},
        {"bunit": "MJy/sr", "band": "V", "mass_msun": 1.2, "distance_pc": 450.0,
         "wavelength_um": 250.0, "temperature_k": 13.0},
        {"bunit": "Jy/beam", "band": "V", "mass_msun": 0.8, "distance_pc": 260.0,
         "wavelength_um": 850.0, "temperature_k": 11.0},
        {"bunit": "mJy/beam", "band": "V", "mass_msun": 3.0, "distance_pc": 500.0,
         "wavelength_um": 1300.0, "temperature_k": 20.0},
    ]
    common = {"nx": 96, "ny": 80, "pixel_arcsec": 4.0, "beam_major_arcsec": 14.0,
              "beam_minor_arcsec": 10.0, "beam_pa_deg": 30.0, "radius_pc": 0.01}
    out = []
    for c in cases:
        c = {**common, **c}
        omega_pix = ((c["pixel_arcsec"] * u.arcsec) ** 2).to(u.sr)
        d = c["distance_pc"] * u.pc
        area = (d ** 2 * omega_pix.value).to(u.cm ** 2)  # physical area of one pixel
        sum_n = (c["mass_msun"] * const.M_sun / (MU_H2 * M_H) / area).to(u.cm ** -2)
        if c["bunit"] == "cm-2":
            value = sum_n.value
        elif c["bunit"] == "mag":
            per_av = 9.4e20 * u.cm ** -2
            if c["band"] == "K":
                per_av = per_av / 0.112
            value = (sum_n / per_av).to(u.dimensionless_unscaled).value
        else:
            nu = (c["wavelength_um"] * u.um).to(u.Hz, equivalencies=u.spectral())
            kappa = 0.1 * u.cm ** 2 / u.g * (nu / (1.0 * u.THz)).to(u.dimensionless_unscaled) ** 2
            bb = BlackBody(temperature=c["temperature_k"] * u.K)(nu)  # per steradian
            intensity = (sum_n * MU_H2 * M_H * kappa * bb * u.sr).to(u.MJy)  # times one sr
            if c["bunit"] == "MJy/sr":
                value = intensity.value
            else:
                omega_beam = (math.pi / (4.0 * math.log(2.0))
                              * (c["beam_major_arcsec"] * u.arcsec)
                              * (c["beam_minor_arcsec"] * u.arcsec)).to(u.sr).value
                unit = u.Jy if c["bunit"] == "Jy/beam" else u.mJy
                value = (intensity * omega_beam).to(unit).value
        c["sum"] = float(value)
        out.append(c)
    write_json(os.path.join(OUT, "injected_sums.json"), {
        "versions": versions(),
        "source": "astropy.units, astropy.constants (M_sun, u), astropy.modeling BlackBody",
        "cases": out,
    })


def matching():
    """One-to-one matching of injected cores to leaves within a radius, on a case where the
    answer is unique (cores far apart compared with the radius)."""
    rng = np.random.RandomState(20261203)
    radius = 18.0  # arcsec
    centres = []
    # A grid of cores 2 arcmin apart around (359.99, -31.6) so that longitudes wrap at 0/360.
    for i in range(5):
        for j in range(4):
            lon = (359.97 + 0.04 * i / math.cos(math.radians(31.6))) % 360.0
            lat = -31.66 + 0.04 * j
            centres.append((lon, lat))
    leaves = []
    for k, (lon, lat) in enumerate(centres):
        # 0, 1 or 2 leaves near each core, at up to 1.4 radii; the second always farther.
        count = k % 3
        offs = sorted(rng.uniform(0.1, 1.4, size=count))
        for o in offs:
            ang = rng.uniform(0, 2 * math.pi)
            dlat = o * radius / 3600.0 * math.sin(ang)
            dlon = o * radius / 3600.0 * math.cos(ang) / math.cos(math.radians(lat))
            leaves.append(((lon + dlon) % 360.0, lat + dlat))
    # Leaves far from every core.
    leaves.append((10.0, 5.0))
    leaves.append((359.5, -31.6))
    order = rng.permutation(len(leaves))
    leaves = [leaves[i] for i in order]
    cores = SkyCoord([c[0] for c in centres], [c[1] for c in centres], unit="deg", frame="icrs")
    lvs = SkyCoord([l[0] for l in leaves], [l[1] for l in leaves], unit="deg", frame="icrs")
    sep = np.array([[cores[i].separation(lvs[j]).to(u.arcsec).value for j in range(len(leaves))]
                    for i in range(len(centres))])
    big = 1e9
    cost = np.where(sep <= radius, sep, big)
    rows, cols = linear_sum_assignment(cost)
    match = [None] * len(centres)
    for r, c in zip(rows, cols):
        if cost[r, c] < big:
            match[r] = int(c)
    # The answer is unique: each matched leaf is the nearest within the radius of its core,
    # and no leaf lies within the radius of two cores.
    within = sep <= radius
    assert within.sum(axis=0).max() <= 1
    for i, m in enumerate(match):
        if m is not None:
            assert m == int(np.argmin(sep[i]))
    write_json(os.path.join(OUT, "matching.json"), {
        "versions": versions(),
        "source": "astropy.coordinates SkyCoord.separation; scipy.optimize.linear_sum_assignment",
        "radius_arcsec": radius,
        "cores": [list(c) for c in centres],
        "leaves": [list(l) for l in leaves],
        "match": [-1 if m is None else m for m in match],
        "separation_arcsec": [float(sep[i, m]) if m is not None else "nan"
                              for i, m in enumerate(match)],
    })


if __name__ == "__main__":
    wilson()
    injected_sums()
    matching()

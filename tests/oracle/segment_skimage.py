"""Reference measurements of cairn's structures, made on cairn's own label map.

Inputs (made by cairn, see examples/make_segment_fixture.rs): fixtures/segment/map.fits, and
run/labels.fits, run/leaves-grown.fits, run/hierarchy.json, run/structures.csv under
fixtures/segment/.

For every structure, its pixels are those whose smallest structure is it or one of its
descendants (from hierarchy.json). Sources:
* scikit-image 0.26.0 skimage.measure.regionprops on the structure's mask with the map as
  intensity image: area, centroid, centroid_weighted, moments_weighted_central (weighted
  covariance = mu / mu00), orientation, axis_major_length and axis_minor_length (unweighted,
  4 standard deviations). regionprops' orientation is the angle between the rows axis and
  the major axis; the direction of that axis in (column, row) is (sin o, cos o).
* the same regionprops on each leaf's grown footprint, the pixels of cairn's grown label plane
  (run/leaves-grown.fits) that carry its id: area, centroid_weighted and the weighted
  covariance, for the catalogue of grown leaves (run/structures-grown.csv).
* astropy 8.0.2 astropy.wcs.WCS.all_pix2world (origin 0) of cairn's catalogue pixel
  positions (peak_x, peak_y and the weighted centroid x, y), and the centroid in galactic
  coordinates from astropy.coordinates.SkyCoord (the map is ICRS) .galactic.
* astropy 8.0.2 (astropy.wcs, astropy.coordinates, astropy.units and astropy.constants) for
  the catalogue's sky sizes and masses, by methods other than cairn's: the solid angle of one
  pixel at cairn's centroid as the spherical quadrilateral of its four corners (a gnomonic
  map's pixel edges are great circles; its two triangles by Van Oosterom & Strackee 1983,
  IEEE Trans. Biomed. Eng. 30, 125), times the pixel count for the area; the map-weighted
  covariance of every pixel's offset on the sky from the centroid (SkyCoord
  .spherical_offsets_to: east, north), whose eigenvalues give the FWHMs and whose major axis
  gives the position angle east of north; masses M = mu_H2 m_H d^2 Omega sum N(H2) with
  astropy's units (mu_H2 = 2.8, m_H = 1.008 u, the run's assumptions; d = 310 pc, the
  map's invented distance) and the mean density of a uniform sphere of the effective radius;
  with the run's gas temperature (12 K), mean particle weight (2.33) and non-thermal
  dispersion (0.2 km/s): the sound speed sqrt(k T / (mu_p m_H)), the Jeans length
  sqrt(pi c_s^2 / (G rho)) and the mass of a sphere of that diameter (Jeans 1902), the
  critical Bonnor-Ebert mass C R c_s^2 / G (Bonnor 1956; C from scipy's Lane-Emden solution in
  fixtures/physics/lane_emden.json), the virial parameter 5 sigma^2 R / (G M) (Bertoldi &
  McKee 1992) and the free-fall time sqrt(3 pi / (32 G rho)), all by astropy's constants and
  units (the year a Julian year); the deconvolved radius sqrt(R^2 - (theta/2)^2 d^2) with the
  beam's geometric-mean FWHM theta, and the unresolved flag where it is less than theta d / 2
  (common practice for the first; the bound is cairn's convention, as its README says).
* beam-deconvolved moment sizes, from the label map and the map alone: numpy's weighted
  moments of each structure's pixel positions (its own centroid and covariance in pixels)
  carried to the sky by the local pixel scale matrix at that centroid,
  astropy.wcs.utils.local_partial_pixel_derivatives taken across one pixel centred on the
  centroid along each axis (its RA row times cos(dec): east and north, in arcsec per pixel;
  at the reference pixel it is WCS.pixel_scale_matrix, checked below). The beam's covariance
  in the same frame, from its FWHMs and position angle east of north (the header's BMAJ,
  BMIN, BPA, and an invented elliptical beam that tests/segment_reference.rs gives cairn as
  its beam option), is subtracted (covariances of Gaussians add under convolution); where
  the difference has a non-positive eigenvalue (numpy.linalg.eigh) the structure counts as
  not resolved, else its eigenvalues give the deconvolved FWHMs, its major eigenvector the
  position angle east of north, and R = 1.91 d (sigma_maj sigma_min)^(1/2) the moment
  radius (Solomon et al. 1987, ApJ 319, 730; Rosolowsky & Leroy 2006, PASP 118, 590), with
  astropy's units.
* astropy 8.0.2 astropy.units (FITS format) on every TUNIT of cairn's run/structures.fits,
  and each divided by the map's BUNIT; the same for cairn's spelling of a sum over pixels
  for other map units (fixtures/segment/pixel_sum_units.json).
* astropy 8.0.2 astropy.io.votable on cairn's run/structures.vot: each annotated field's UCD,
  whether astropy.io.votable.ucd.check_ucd accepts it against the IVOA controlled vocabulary,
  and the system and equinox of the COOSYS it refers to; the document parsed with every
  warning an error, and each PARAM's datatype and unit (VOUnit format); astropy.io.fits on
  run/structures.fits, verified, with each parameter keyword's type.
* astropy 8.0.2 astropy.units on every unit cairn's catalogues write for each spelling of a
  map's unit (fixtures/segment/unit_spellings.json): parsed in the FITS and VOUnit formats,
  the unit read in SI and, for a surface brightness (per steradian, square arcsecond, square
  arcminute or square degree), in MJy/sr, the BUNIT as astropy reads it in that unit, the
  sum over pixels.
"""
import csv
import json
import os

import numpy as np
from astropy.io import fits
from astropy.wcs import WCS
from astropy.coordinates import SkyCoord
import astropy.units as u
from skimage.measure import regionprops

from common import fixtures_dir, out_dir, write_json

SRC = os.path.join(fixtures_dir(), "segment")
OUT = out_dir("segment")

with fits.open(os.path.join(SRC, "map.fits")) as h:
    image = h[0].data.astype(np.float64)
    wcs = WCS(h[0].header)
    # The beam's geometric-mean FWHM (BMAJ, BMIN in degrees, FITS common practice).
    BEAM = np.sqrt(h[0].header["BMAJ"] * h[0].header["BMIN"]) * u.deg
with fits.open(os.path.join(SRC, "run", "labels.fits")) as h:
    labels = h[0].data.astype(np.int64)
with open(os.path.join(SRC, "run", "hierarchy.json")) as f:
    tree = json.load(f)
with open(os.path.join(SRC, "run", "structures.csv")) as f:
    rows = list(csv.DictReader(line for line in f if not line.startswith("#")))

children = {s["id"]: s["children"] for s in tree["structures"]}


def subtree(i):
    out, todo = [], [i]
    while todo:
        k = todo.pop()
        out.append(k)
        todo.extend(children[k])
    return out


result = {}
for s in tree["structures"]:
    i = s["id"]
    mask = np.isin(labels, subtree(i)).astype(np.int64)
    # Missing pixels never carry a label, so the intensity image has no NaN inside the mask.
    intensity = np.where(np.isfinite(image), image, 0.0)
    p = regionprops(mask, intensity_image=intensity)[0]
    mu = p.moments_weighted_central
    o = p.orientation
    result[str(i)] = {
        "area": p.area,
        "centroid_row": p.centroid[0],
        "centroid_col": p.centroid[1],
        "weighted_row": p.centroid_weighted[0],
        "weighted_col": p.centroid_weighted[1],
        "cov_rr": mu[2, 0] / mu[0, 0],
        "cov_cc": mu[0, 2] / mu[0, 0],
        "cov_rc": mu[1, 1] / mu[0, 0],
        "major_dir_col": np.sin(o),
        "major_dir_row": np.cos(o),
        "axis_major_length": p.axis_major_length,
        "axis_minor_length": p.axis_minor_length,
    }

# The leaves over their grown footprints: the pixels of the grown plane carrying their id.
with fits.open(os.path.join(SRC, "run", "leaves-grown.fits")) as h:
    grown_labels = h[0].data.astype(np.int64)
grown = {}
for s in tree["structures"]:
    if s["children"]:
        continue
    i = s["id"]
    mask = (grown_labels == i).astype(np.int64)
    intensity = np.where(np.isfinite(image), image, 0.0)
    p = regionprops(mask, intensity_image=intensity)[0]
    mu = p.moments_weighted_central
    grown[str(i)] = {
        "area": p.area,
        "weighted_row": p.centroid_weighted[0],
        "weighted_col": p.centroid_weighted[1],
        "cov_rr": mu[2, 0] / mu[0, 0],
        "cov_cc": mu[0, 2] / mu[0, 0],
        "cov_rc": mu[1, 1] / mu[0, 0],
    }

sky = {}
for r in rows:
    px, py = float(r["peak_x"]), float(r["peak_y"])
    cx, cy = float(r["x"]), float(r["y"])
    (plon, plat), (clon, clat) = wcs.all_pix2world([[px, py], [cx, cy]], 0)
    g = SkyCoord(clon * u.deg, clat * u.deg, frame="icrs").galactic
    sky[r["id"]] = {"peak_lon": plon, "peak_lat": plat, "lon": clon, "lat": clat,
                    "glon": g.l.deg, "glat": g.b.deg}

# Sky sizes and masses (see the docstring).
from astropy import constants as const


def unit_vector(lon, lat):
    lon, lat = np.radians(lon), np.radians(lat)
    return np.array([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)])


def triangle_sr(a, b, c):
    """Solid angle of a spherical triangle (Van Oosterom & Strackee 1983)."""
    num = abs(np.dot(a, np.cross(b, c)))
    den = 1.0 + np.dot(a, b) + np.dot(b, c) + np.dot(c, a)
    return 2.0 * np.arctan2(num, den)


def pixel_sr(x, y):
    corners = wcs.all_pix2world([[x - 0.5, y - 0.5], [x + 0.5, y - 0.5],
                                 [x + 0.5, y + 0.5], [x - 0.5, y + 0.5]], 0)
    v = [unit_vector(lon, lat) for lon, lat in corners]
    return triangle_sr(v[0], v[1], v[2]) + triangle_sr(v[0], v[2], v[3])


DISTANCE = 310.0 * u.pc
TEMPERATURE, MU_P, SIGMA_NT = 12.0 * u.K, 2.33, 0.2 * u.km / u.s
with open(os.path.join(fixtures_dir(), "physics", "lane_emden.json")) as f:
    BE_COEFFICIENT = json.load(f)["coefficient_c"]
MU_H2, M_H = 2.8, 1.008 * u.u
FWHM_PER_SIGMA = 2.0 * np.sqrt(2.0 * np.log(2.0))
by_id = {r["id"]: r for r in rows}
rows_px, cols_px = np.indices(image.shape)
physical = {}
for s in tree["structures"]:
    i = s["id"]
    r = by_id[str(i)]
    inside = np.isin(labels, subtree(i))
    cx, cy = float(r["x"]), float(r["y"])
    omega = pixel_sr(cx, cy)
    n = int(inside.sum())
    area_sr = n * omega
    # Offsets on the sky of every pixel centre from the centroid, weighted by the map.
    (clon, clat), = wcs.all_pix2world([[cx, cy]], 0)
    lon, lat = wcs.all_pix2world(cols_px[inside], rows_px[inside], 0)
    centre = SkyCoord(clon * u.deg, clat * u.deg, frame="icrs")
    east, north = centre.spherical_offsets_to(SkyCoord(lon * u.deg, lat * u.deg, frame="icrs"))
    e, nn_ = east.to_value(u.arcsec), north.to_value(u.arcsec)
    w = image[inside]
    n_ = nn_
    me, mn = np.average(e, weights=w), np.average(n_, weights=w)
    cov = np.array([[np.average((e - me) ** 2, weights=w), np.average((e - me) * (n_ - mn), weights=w)],
                    [np.average((e - me) * (n_ - mn), weights=w), np.average((n_ - mn) ** 2, weights=w)]])
    evals, evecs = np.linalg.eigh(cov)
    major = evecs[:, 1]
    pa = np.degrees(np.arctan2(major[0], major[1])) % 180.0
    column = (w.sum() * u.cm ** -2)
    excess = ((w - s["merge_level"]).sum() * u.cm ** -2)
    # A steradian is dimensionless in astropy: Omega d^2 is the pixel's area at the cloud.
    pixel_area = omega * DISTANCE ** 2
    unit_mass = MU_H2 * M_H
    mass = (column * pixel_area * unit_mass).to(u.Msun)
    mass_excess = (excess * pixel_area * unit_mass).to(u.Msun)
    radius = np.sqrt(n * pixel_area / np.pi)
    density = (mass_excess / (4.0 / 3.0 * np.pi * radius ** 3) / unit_mass).to(u.cm ** -3)
    # The stability columns: the run's gas temperature, mean particle weight and
    # non-thermal dispersion; the Bonnor-Ebert coefficient from the Lane-Emden oracle
    # (fixtures/physics/lane_emden.json, scipy solve_ivp).
    cs2 = const.k_B * TEMPERATURE / (MU_P * M_H)
    sigma2 = cs2 + SIGMA_NT ** 2
    rho = mass_excess / (4.0 / 3.0 * np.pi * radius ** 3)
    jeans_length = np.sqrt(np.pi * cs2 / (const.G * rho))
    jeans_mass = np.pi / 6.0 * jeans_length ** 3 * rho  # a sphere of diameter jeans_length
    be_mass = BE_COEFFICIENT * radius * cs2 / const.G
    alpha_vir = (5.0 * sigma2 * radius / (const.G * mass_excess)).decompose()
    t_ff = np.sqrt(3.0 * np.pi / (32.0 * const.G * rho))
    # The deconvolved radius, half the beam (at the cloud) removed in quadrature; unresolved
    # when it is less than half the beam (the README's convention).
    half_beam = (0.5 * BEAM).to_value(u.rad) * DISTANCE
    deconvolved = np.sqrt(max((radius ** 2 - half_beam ** 2).to_value(u.pc ** 2), 0.0)) * u.pc
    unresolved = bool(deconvolved < half_beam)
    physical[str(i)] = {
        "radius_deconv_pc": None if unresolved else deconvolved.to_value(u.pc),
        "unresolved": unresolved,
        "jeans_length_pc": jeans_length.to_value(u.pc),
        "jeans_mass_msun": jeans_mass.to_value(u.Msun),
        "be_mass_msun": be_mass.to_value(u.Msun),
        "alpha_be": (be_mass / mass_excess).decompose().value,
        "sigma_v_kms": np.sqrt(sigma2).to_value(u.km / u.s),
        "alpha_vir": alpha_vir.value,
        "t_ff_yr": t_ff.to_value(u.yr),
        "pixel_sr": omega,
        "area_arcsec2": (area_sr * u.sr).to_value(u.arcsec ** 2),
        "radius_arcsec": np.sqrt((area_sr * u.sr).to_value(u.arcsec ** 2) / np.pi),
        "cov_east_east": cov[0, 0], "cov_east_north": cov[0, 1], "cov_north_north": cov[1, 1],
        "fwhm_major_arcsec": FWHM_PER_SIGMA * np.sqrt(evals[1]),
        "fwhm_minor_arcsec": FWHM_PER_SIGMA * np.sqrt(evals[0]),
        "pa_deg": pa,
        "mass_msun": mass.value,
        "mass_excess_msun": mass_excess.value,
        "radius_pc": radius.to_value(u.pc),
        "density_cm3": density.value,
    }

# Beam-deconvolved moment sizes (see the docstring).
from astropy.wcs.utils import local_partial_pixel_derivatives

with fits.open(os.path.join(SRC, "map.fits")) as h:
    HEADER_BEAM = {"major_arcsec": h[0].header["BMAJ"] * 3600.0,
                   "minor_arcsec": h[0].header["BMIN"] * 3600.0,
                   "pa_deg": h[0].header["BPA"]}
# An invented elliptical beam, larger than the map's own along one direction, so that some
# structures are resolved along both axes and others not; the Rust test reads it from here.
ELLIPTICAL_BEAM = {"major_arcsec": 60.0, "minor_arcsec": 30.0, "pa_deg": 35.0}
MOMENT_RADIUS_FACTOR = 1.91  # Solomon et al. 1987; Rosolowsky & Leroy 2006


def pixel_scale_matrix_at(x, y):
    """(east, north) arcsec per pixel step: column 0 along x, column 1 along y."""
    m = np.empty((2, 2))
    m[:, 0] = local_partial_pixel_derivatives(wcs, x - 0.5, y)[:, 0]
    m[:, 1] = local_partial_pixel_derivatives(wcs, x, y - 0.5)[:, 1]
    (_, lat), = wcs.all_pix2world([[x, y]], 0)
    m[0] *= np.cos(np.radians(lat))
    return m * 3600.0


# At the reference pixel the local matrix is astropy's pixel_scale_matrix (to the curvature of
# the projection over one pixel).
ref_x, ref_y = wcs.wcs.crpix - 1.0
assert np.allclose(pixel_scale_matrix_at(ref_x, ref_y), wcs.pixel_scale_matrix * 3600.0,
                   rtol=0.0, atol=1e-8)


def beam_covariance(beam):
    """Covariance (arcsec^2, axes east and north) of a Gaussian beam."""
    sa = beam["major_arcsec"] / FWHM_PER_SIGMA
    sb = beam["minor_arcsec"] / FWHM_PER_SIGMA
    pa = np.radians(beam["pa_deg"])
    major = np.array([np.sin(pa), np.cos(pa)])  # (east, north)
    minor = np.array([np.cos(pa), -np.sin(pa)])
    return sa ** 2 * np.outer(major, major) + sb ** 2 * np.outer(minor, minor)


def deconvolved_sizes(beam):
    out = {}
    b = beam_covariance(beam)
    for s in tree["structures"]:
        i = s["id"]
        inside = np.isin(labels, subtree(i))
        w = image[inside]
        xs, ys = cols_px[inside].astype(np.float64), rows_px[inside].astype(np.float64)
        mx, my = np.average(xs, weights=w), np.average(ys, weights=w)
        c = np.array([[np.average((xs - mx) ** 2, weights=w), np.average((xs - mx) * (ys - my), weights=w)],
                      [np.average((xs - mx) * (ys - my), weights=w), np.average((ys - my) ** 2, weights=w)]])
        j = pixel_scale_matrix_at(mx, my)
        measured = j @ c @ j.T
        d = measured - b
        evals, evecs = np.linalg.eigh(d)
        entry = {"measured_trace_arcsec2": np.trace(measured),
                 "deconv_cov_east_east": d[0, 0], "deconv_cov_east_north": d[0, 1],
                 "deconv_cov_north_north": d[1, 1], "deconv_min_eigenvalue": evals[0]}
        if evals[0] > 0.0:
            s_maj, s_min = np.sqrt(evals[1]), np.sqrt(evals[0])
            major = evecs[:, 1]
            radius = (MOMENT_RADIUS_FACTOR * np.sqrt(s_maj * s_min) * u.arcsec).to_value(u.rad) * DISTANCE
            entry.update({"resolved": True,
                          "fwhm_major_deconv_arcsec": FWHM_PER_SIGMA * s_maj,
                          "fwhm_minor_deconv_arcsec": FWHM_PER_SIGMA * s_min,
                          "pa_deconv_deg": np.degrees(np.arctan2(major[0], major[1])) % 180.0,
                          "radius_moment_pc": radius.to_value(u.pc)})
        else:
            entry["resolved"] = False
        out[str(i)] = entry
    return out


deconvolved = {
    "header_beam": {"beam": HEADER_BEAM, "structures": deconvolved_sizes(HEADER_BEAM)},
    "elliptical_beam": {"beam": ELLIPTICAL_BEAM, "structures": deconvolved_sizes(ELLIPTICAL_BEAM)},
}

from astropy.io import votable
from astropy.io.votable.ucd import check_ucd

vot = votable.parse(os.path.join(SRC, "run", "structures.vot"))
systems = {c.ID: (c.system, c.equinox) for c in vot.iter_coosys()}
ucds = {}
for fld in vot.get_first_table().fields:
    if fld.ucd:
        system, equinox = systems.get(fld.ref, (None, None))
        ucds[fld.name] = {"ucd": fld.ucd,
                          "valid": bool(check_ucd(fld.ucd, check_controlled_vocabulary=True)),
                          "system": system, "equinox": equinox}

# The catalogue's units as a FITS reader understands them: astropy.units (format "fits") on
# every TUNIT of run/structures.fits, and each sum over pixels divided by the map's BUNIT
# (it should leave the pixel alone).
with fits.open(os.path.join(SRC, "map.fits")) as h:
    map_unit = u.Unit(h[0].header["BUNIT"], format="fits")
units = {}
with fits.open(os.path.join(SRC, "run", "structures.fits")) as h:
    for col in h[1].columns:
        if col.unit:
            parsed = u.Unit(col.unit, format="fits")
            units[col.name] = {"tunit": col.unit, "parsed": parsed.to_string("fits"),
                               "over_map_unit": (parsed / map_unit).to_string("fits")}

# cairn's unit of a sum over pixels for other map units (fixtures/segment/pixel_sum_units.json,
# which tests/segment_reference.rs keeps equal to cairn's current spelling), divided by the map
# unit as astropy reads both.
with open(os.path.join(SRC, "pixel_sum_units.json")) as f:
    spelled = json.load(f)
pixel_sums = {b: (u.Unit(s, format="fits") / u.Unit(b, format="fits")).to_string("fits")
              for b, s in spelled.items()}

# The units cairn's catalogues write for each spelling of a map's unit
# (fixtures/segment/unit_spellings.json, made by examples/make_segment_fixture.rs and kept
# equal to cairn's current output by tests/segment_reference.rs): every one parsed by
# astropy.units in the FITS format and in the VOUnit one; the unit cairn read (its `unit`
# parameter) in SI (none for a magnitude) and, where it is a surface brightness, in MJy/sr
# (null for others); the map's BUNIT as astropy reads it (FITS format, else its generic one;
# null where it reads neither) in that unit; and the sum unit over the unit read.
def unit_text(s, fmt):
    try:
        return u.Unit(s, format=fmt, parse_strict="raise").to_string(fmt)
    except Exception:
        return None


def astropy_reading(s):
    for fmt in ("fits", None):
        try:
            return u.Unit(s, format=fmt, parse_strict="raise")
        except Exception:
            pass
    return None


def si_scale(unit):
    """The unit in SI (its scale over the SI base units, with the beam and the pixel as
    units of their own), or None for a magnitude, which astropy holds as a logarithmic unit
    without one."""
    try:
        return float(unit.decompose(bases=set(u.si.bases) | {u.beam, u.pix}).scale)
    except u.UnitConversionError:
        return None


with open(os.path.join(SRC, "unit_spellings.json")) as f:
    spellings = json.load(f)
unit_spellings = {}
for bunit, run in spellings.items():
    read = u.Unit(run["unit"], format="fits")
    theirs = astropy_reading(bunit)
    if theirs is None:
        in_read = None
    elif theirs.is_equivalent(read):
        in_read = float(theirs.to(read))
    else:
        in_read = "not equivalent"
    unit_spellings[bunit] = {
        "units": {s: {"fits": unit_text(s, "fits"), "vounit": unit_text(s, "vounit")}
                  for s in run["units"]},
        "unit_si_scale": si_scale(read),
        "unit_in_mjy_per_sr": float(read.to(u.MJy / u.sr))
        if read.is_equivalent(u.MJy / u.sr) else None,
        "bunit_in_unit": in_read,
        "sum_over_unit": (u.Unit(run["sum_unit"], format="fits") / read).to_string("fits"),
    }

# The stored catalogue as a strict reader takes it: astropy.io.votable with every warning an
# error (units and PARAMs included), and each FITS table keyword of the standard form
# (astropy.io.fits's verify) with the type astropy reads.
votable.parse(os.path.join(SRC, "run", "structures.vot"), verify="exception")
vot_params = {p.name: {"datatype": p.datatype,
                       "unit": None if p.unit is None else p.unit.to_string("vounit")}
              for p in vot.get_first_table().params}
with fits.open(os.path.join(SRC, "run", "structures.fits")) as h:
    h.verify("exception")
    fits_params = {}
    for card in h[1].header.cards:
        k = card.keyword
        if k in ("XTENSION", "BITPIX", "NAXIS", "NAXIS1", "NAXIS2", "PCOUNT", "GCOUNT",
                 "TFIELDS", "EXTNAME", "COMMENT", "LONGSTRN", "CONTINUE", "") \
                or k[:5] in ("TTYPE", "TFORM", "TUNIT"):
            continue
        v = card.value
        fits_params[k] = {"type": "int" if isinstance(v, int) and not isinstance(v, bool)
                          else "float" if isinstance(v, float) else "str",
                          "standard_keyword": len(k) <= 8 and not card.field_specifier
                          and not k.startswith("HIERARCH")}

import astropy
import skimage

write_json(os.path.join(OUT, "reference.json"), {
    "skimage": skimage.__version__,
    "astropy": astropy.__version__,
    "regionprops": result,
    "grown_regionprops": grown,
    "sky": sky,
    "physical": physical,
    "deconvolved": deconvolved,
    "votable_ucds": ucds,
    "fits_units": units,
    "pixel_sum_units_over_map_unit": pixel_sums,
    "unit_spellings": unit_spellings,
    "votable_params": vot_params,
    "fits_params": fits_params,
})

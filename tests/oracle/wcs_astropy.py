"""Reference values for cairn's sky-coordinate module (src/wcs) from astropy.wcs (WCSLIB)
and astropy.coordinates.

Run as `python tests/oracle/wcs_astropy.py OUTDIR`; writes OUTDIR/wcs/*.json.

Headers: a set invented here (positions are arbitrary numbers, not any real object) covering
every projection, matrix form, frame and pole configuration cairn reads; plus the projection
test headers astropy ships in astropy/wcs/tests/data/maps/*.hdr (read from the installed
package at run time; only their WCS cards are stored, named by projection code).

For each header, with astropy.wcs.WCS (origin 0 = cairn's zero-based pixels):
* pixel -> sky on a grid that extends beyond the map (so that points outside a projection's
  domain give NaN), and sky -> pixel of every finite result;
* the pixel area at the reference pixel, astropy.wcs.utils.proj_plane_pixel_area (deg^2);
* the solid angle and the two pixel scales at off-reference pixels (and, as "ref_stencil",
  at the reference pixel), from astropy's pixel -> sky by a five-point central difference
  of the unit vector n on the sky: dn/dx = (n(x-2h) - 8 n(x-h) + 8 n(x+h) - n(x+2h)) / (12 h)
  with h = min(0.5 pixel, 1e-3 rad on the sky); solid angle |dn/dx x dn/dy| (sr), scales
  |dn/dx|, |dn/dy| (deg). Truncation error is O(s^4) relative for a step s = 1e-3 rad
  (about 1e-12 where the projection's distortion varies on a scale of a radian); round-off
  is about 1e-15 rad / s = 1e-12 relative.

scale_pixel.json: two maps whose centre lies off the sky (outside the projection's domain),
with the pixel where cairn's rule takes their scales (the reference pixel, or the pixel on
the sky nearest it by astropy's pixel -> sky of every pixel), and the stencil's scales and
solid angle there.

Frame conversions ICRS <-> galactic <-> FK5 (equinoxes J2000, J1975, J2030), and from FK4
(equinoxes B1950, B1975) to those, come from astropy.coordinates.SkyCoord on a set of invented
positions.
"""
import glob
import os

import numpy as np
import astropy
from astropy.io import fits
from astropy.wcs import WCS
from astropy.wcs.utils import proj_plane_pixel_area, wcs_to_celestial_frame
from astropy.coordinates import SkyCoord, FK4, FK4NoETerms, FK5
import astropy.units as u

from common import out_dir, write_json

WCS_KEYS = ("NAXIS", "CTYPE", "CRPIX", "CDELT", "CRVAL", "CUNIT", "CD", "PC", "CROTA", "PV",
            "LONPOLE", "LATPOLE", "RADESYS", "RADECSYS", "EQUINOX", "EPOCH", "WCSAXES")
SUPPORTED = {"AZP", "SZP", "TAN", "STG", "SIN", "NCP", "ARC", "ZPN", "ZEA", "AIR", "CYP", "CEA",
             "CAR", "MER", "SFL", "GLS", "PAR", "MOL", "AIT", "COP", "COE", "COD", "COO", "BON",
             "PCO", "HPX", "TSC", "QSC"}


def cards_of(pairs):
    """80-character card images from (key, value) pairs."""
    return [fits.Card(k, v).image for k, v in pairs]


def simple(naxis, ctype, crpix, crval, extra=(), cdelt=None, cunit=None):
    pairs = [("NAXIS", 2), ("NAXIS1", naxis[0]), ("NAXIS2", naxis[1]),
             ("CTYPE1", ctype[0]), ("CTYPE2", ctype[1]),
             ("CRPIX1", crpix[0]), ("CRPIX2", crpix[1]),
             ("CRVAL1", crval[0]), ("CRVAL2", crval[1])]
    if cdelt is not None:
        pairs += [("CDELT1", cdelt[0]), ("CDELT2", cdelt[1])]
    if cunit is not None:
        pairs += [("CUNIT1", cunit[0]), ("CUNIT2", cunit[1])]
    return pairs + list(extra)


def invented_headers():
    h = {}
    eq = ("RA---{0}", "DEC--{0}")
    gal = ("GLON-{0}", "GLAT-{0}")

    def t(pair, code):
        return (pair[0].format(code), pair[1].format(code))

    # Matrix forms and frames.
    h["tan_cd_icrs"] = simple((200, 150), t(eq, "TAN"), (101.5, 75.25), (133.125, -6.8125), [
        ("CD1_1", -2.1e-3), ("CD1_2", 4.0e-4), ("CD2_1", 3.5e-4), ("CD2_2", 2.2e-3),
        ("RADESYS", "ICRS")])
    h["sin_pc_fk5"] = simple((256, 256), t(eq, "SIN"), (128.0, 130.5), (238.75, 36.5), [
        ("PC1_1", 0.9), ("PC1_2", -0.3), ("PC2_1", 0.25), ("PC2_2", 0.95), ("EQUINOX", 2000.0)],
        cdelt=(-0.1, 0.1))
    h["arc_crota"] = simple((300, 300), t(eq, "ARC"), (150.0, 140.0), (12.5, -47.25),
                            [("CROTA2", 30.0), ("RADESYS", "FK5"), ("EQUINOX", 2000.0)],
                            cdelt=(-0.2, 0.2))
    # CROTA on a map stored latitude first (the rotation keeps its sense on the sky), and
    # CROTA2 beside a PC card of another axis (a PC matrix then, and CROTA2 unread).
    h["tan_crota_lat_first"] = simple((160, 120), ("DEC--TAN", "RA---TAN"), (60.5, 80.25),
                                      (-6.625, 133.8125), [("CROTA1", 25.0)],
                                      cdelt=(0.0012, -0.002))
    h["tan_crota2_pc33"] = simple((160, 120), t(eq, "TAN"), (80.25, 60.5), (133.8125, -6.625),
                                  [("CROTA2", 25.0), ("PC3_3", 1.0)], cdelt=(-0.002, 0.0012))
    # WCS keywords given twice, the later cards differing: WCSLIB reads the last.
    h["tan_repeated_cards"] = simple((120, 100), t(eq, "TAN"), (60.5, 50.5), (133.6879, -6.7258),
                                     [("CDELT1", -0.002), ("CRVAL1", 133.77)],
                                     cdelt=(-0.00166666666666667, 0.00166666666666667))
    h["tan_arcmin"] = simple((120, 100), t(eq, "TAN"), (60.0, 50.0), (7200.0, 1230.0),
                             cdelt=(-0.5, 0.5), cunit=("arcmin", "arcmin"))
    h["tan_arcsec_fk4"] = simple((100, 100), t(eq, "TAN"), (50.0, 50.0), (100.25, 20.125),
                                 [("CDELT1", -6.0), ("CDELT2", 6.0), ("CUNIT1", "arcsec"),
                                  ("CUNIT2", "arcsec"), ("EQUINOX", 1950.0)])
    h["tan_rad"] = simple((100, 100), t(eq, "TAN"), (50.0, 50.0), (1.0, 0.5),
                          cdelt=(-1e-4, 1e-4), cunit=("rad", "rad"))
    # Projections (big maps, so that off-reference distortion matters and, where the domain
    # is bounded, the grid reaches beyond it).
    h["sin_slant"] = simple((200, 200), t(eq, "SIN"), (100.0, 100.0), (150.0, 20.0),
                            [("PV2_1", 0.15), ("PV2_2", -0.25)], cdelt=(-0.6, 0.6))
    h["ncp"] = simple((200, 200), t(eq, "NCP"), (90.0, 110.0), (45.5, 40.0),
                      cdelt=(-0.5, 0.5))
    h["zea_galactic"] = simple((400, 300), t(gal, "ZEA"), (200.5, 150.5), (30.0, 10.0),
                               cdelt=(-0.5, 0.5))
    h["stg_near_pole"] = simple((300, 300), t(eq, "STG"), (150.0, 150.0), (66.0, 89.9),
                                cdelt=(-0.3, 0.3))
    h["tan_big"] = simple((1000, 1000), t(eq, "TAN"), (500.5, 500.5), (210.0, -30.0),
                          cdelt=(-0.06, 0.06))
    h["car_galactic_allsky"] = simple((400, 200), t(gal, "CAR"), (200.5, 100.5), (0.0, 0.0),
                                      cdelt=(-1.0, 1.0))
    h["car_offset_lat"] = simple((200, 200), t(eq, "CAR"), (100.0, 100.0), (120.0, 50.0),
                                 cdelt=(-0.5, 0.5))
    h["car_latpole_south"] = simple((200, 200), t(eq, "CAR"), (100.0, 100.0), (120.0, 50.0),
                                    [("LATPOLE", -90.0)], cdelt=(-0.5, 0.5))
    h["car_ref_at_pole"] = simple((200, 200), t(eq, "CAR"), (100.0, 100.0), (40.0, 90.0),
                                  cdelt=(-0.5, 0.5))
    h["sfl"] = simple((360, 180), t(eq, "SFL"), (180.5, 90.5), (180.0, 0.0),
                      cdelt=(-1.0, 1.0))
    h["gls"] = simple((200, 200), t(eq, "GLS"), (100.0, 100.0), (30.0, 20.0),
                      cdelt=(-0.4, 0.4))
    h["ait_galactic_allsky"] = simple((400, 200), t(gal, "AIT"), (200.5, 100.5), (0.0, 0.0),
                                      cdelt=(-1.0, 1.0))
    h["ait_offset"] = simple((300, 200), t(eq, "AIT"), (150.0, 100.0), (270.0, -35.0),
                             cdelt=(-0.8, 0.8))
    h["mer"] = simple((300, 300), t(eq, "MER"), (150.0, 150.0), (300.0, 0.0),
                      cdelt=(-0.5, 0.5))
    h["mer_offset"] = simple((200, 200), t(gal, "MER"), (100.0, 100.0), (330.0, 25.0),
                             cdelt=(-0.4, 0.4))
    # Axis order, cubes, LONPOLE, poles.
    h["tan_swapped_axes"] = simple((150, 200), ("DEC--TAN", "RA---TAN"), (70.0, 90.0),
                                   (-12.25, 320.5), [("CD1_1", 0.0), ("CD1_2", 1.5e-3),
                                                     ("CD2_1", -1.5e-3), ("CD2_2", 0.0)])
    h["sin_swapped_pc"] = simple((150, 200), ("DEC--SIN", "RA---SIN"), (70.0, 90.0),
                                 (35.0, 100.5), [("PC1_1", 0.8), ("PC1_2", 0.6),
                                                 ("PC2_1", -0.6), ("PC2_2", 0.8)],
                                 cdelt=(0.2, -0.2))
    cube = simple((120, 110), t(eq, "TAN"), (60.0, 55.0), (95.5, 15.75),
                  [("CTYPE3", "FREQ"), ("CRPIX3", 1.0), ("CRVAL3", 2.3e11), ("CDELT3", 1.0e6),
                   ("CUNIT3", "Hz"), ("RADESYS", "ICRS")], cdelt=(-2e-3, 2e-3))
    cube[0] = ("NAXIS", 3)
    cube.insert(3, ("NAXIS3", 1))
    h["tan_cube_freq"] = cube
    h["tan_lonpole"] = simple((200, 200), t(eq, "TAN"), (100.0, 100.0), (60.0, 30.0),
                              [("LONPOLE", 150.0)], cdelt=(-0.1, 0.1))
    h["tan_ref_at_pole"] = simple((200, 200), t(eq, "TAN"), (100.0, 100.0), (0.0, 90.0),
                                  cdelt=(-0.1, 0.1))
    h["zea_south_pole"] = simple((200, 200), t(gal, "ZEA"), (100.0, 100.0), (10.0, -90.0),
                                 cdelt=(-0.5, 0.5))
    h["arc_near_pole_lonpole"] = simple((200, 200), t(eq, "ARC"), (100.0, 100.0),
                                        (300.0, -89.5), [("LONPOLE", 90.0)],
                                        cdelt=(-0.1, 0.1))
    h["zea_fiducial_override"] = simple((200, 200), t(eq, "ZEA"), (100.0, 100.0),
                                        (30.0, 40.0), [("PV1_1", 20.0), ("PV1_2", 70.0)],
                                        cdelt=(-0.5, 0.5))
    h["car_pv_lonpole_latpole"] = simple((200, 200), t(gal, "CAR"), (100.0, 100.0),
                                         (20.0, 35.0), [("PV1_3", 20.0), ("PV1_4", -60.0)],
                                         cdelt=(-0.5, 0.5))
    # Further projections with parameters of our own.
    h["azp_tilted"] = simple((200, 200), t(eq, "AZP"), (100.0, 100.0), (150.0, 10.0),
                             [("PV2_1", 1.5), ("PV2_2", 25.0)], cdelt=(-0.5, 0.5))
    h["szp"] = simple((200, 200), t(eq, "SZP"), (100.0, 100.0), (20.0, -20.0),
                      [("PV2_1", 1.5), ("PV2_2", 30.0), ("PV2_3", 70.0)], cdelt=(-0.5, 0.5))
    h["zpn_linear_quadratic"] = simple((200, 200), t(eq, "ZPN"), (100.0, 100.0), (5.0, 60.0),
                                       [("PV2_1", 1.0), ("PV2_2", -0.2)], cdelt=(-0.5, 0.5))
    h["air"] = simple((200, 200), t(eq, "AIR"), (100.0, 100.0), (100.0, 45.0),
                      [("PV2_1", 60.0)], cdelt=(-0.5, 0.5))
    h["cea"] = simple((200, 200), t(gal, "CEA"), (100.0, 100.0), (45.0, 0.0),
                      [("PV2_1", 0.5)], cdelt=(-1.0, 1.0))
    h["cyp"] = simple((200, 200), t(gal, "CYP"), (100.0, 100.0), (45.0, 0.0),
                      [("PV2_1", 0.5), ("PV2_2", 0.8)], cdelt=(-1.0, 1.0))
    h["par"] = simple((200, 200), t(eq, "PAR"), (100.0, 100.0), (200.0, 10.0),
                      cdelt=(-1.0, 1.0))
    h["mol"] = simple((200, 200), t(eq, "MOL"), (100.0, 100.0), (200.0, 10.0),
                      cdelt=(-1.0, 1.0))
    h["cop_north"] = simple((200, 200), t(eq, "COP"), (100.0, 100.0), (30.0, 50.0),
                            [("PV2_1", 45.0), ("PV2_2", 10.0)], cdelt=(-0.5, 0.5))
    h["coe_south"] = simple((200, 200), t(eq, "COE"), (100.0, 100.0), (30.0, -40.0),
                            [("PV2_1", -30.0), ("PV2_2", 15.0)], cdelt=(-0.5, 0.5))
    h["cod"] = simple((200, 200), t(eq, "COD"), (100.0, 100.0), (30.0, 40.0),
                      [("PV2_1", 40.0), ("PV2_2", 20.0)], cdelt=(-0.5, 0.5))
    h["coo"] = simple((200, 200), t(eq, "COO"), (100.0, 100.0), (30.0, 40.0),
                      [("PV2_1", 40.0), ("PV2_2", 20.0)], cdelt=(-0.5, 0.5))
    h["bon"] = simple((200, 200), t(eq, "BON"), (100.0, 100.0), (30.0, 40.0),
                      [("PV2_1", 30.0)], cdelt=(-0.5, 0.5))
    h["pco"] = simple((200, 200), t(eq, "PCO"), (100.0, 100.0), (30.0, 40.0),
                      cdelt=(-0.5, 0.5))
    # HEALPix (Calabretta & Roukema 2007): the equatorial zone, and polar facets with an even
    # K (so the facet centres shift) reaching past the pole into the plane's empty parts.
    h["hpx_equatorial"] = simple((300, 200), t(gal, "HPX"), (150.5, 100.5), (30.0, 10.0),
                                 cdelt=(-0.2, 0.2))
    h["hpx_polar_h6_k4"] = simple((300, 300), t(eq, "HPX"), (150.5, 150.5), (45.0, 70.0),
                                  [("PV2_1", 6.0), ("PV2_2", 4.0)], cdelt=(-0.4, 0.4))
    # The tangential spherical cube over most of the sky: every face (plane x from -41 to 318
    # degrees, the map not covering any part of the sky twice), and the plane's empty parts.
    h["tsc_whole_sky"] = simple((300, 240), t(gal, "TSC"), (12.0, 120.5), (20.0, 5.0),
                                cdelt=(1.0, 1.0))
    # The quadrilateralized spherical cube, likewise.
    h["qsc_whole_sky"] = simple((300, 240), t(eq, "QSC"), (12.0, 120.5), (250.0, -35.0),
                                cdelt=(1.0, 1.0))
    # SIP distortion (Shupe et al. 2005): second- and third-order terms of up to a pixel
    # over the grid; with a stored approximate inverse (AP, BP: the first-order inverse,
    # minus A and B), without one, and with the latitude axis first.
    a = [("A_2_0", 5.0e-5), ("A_1_1", -3.0e-5), ("A_0_2", 1.5e-5), ("A_3_0", 1.0e-7),
         ("A_1_2", -6.0e-8)]
    b = [("B_2_0", -2.0e-5), ("B_1_1", 4.0e-5), ("B_0_2", 2.5e-5), ("B_2_1", 8.0e-8),
         ("B_0_3", -5.0e-8)]
    inv = ([("AP_ORDER", 3)] + [("AP" + k[1:], -v) for k, v in a]
           + [("BP_ORDER", 3)] + [("BP" + k[1:], -v) for k, v in b])
    h["tan_sip_cd"] = simple((200, 150), ("RA---TAN-SIP", "DEC--TAN-SIP"), (101.5, 75.25),
                             (133.125, -6.8125), [
        ("CD1_1", -2.1e-3), ("CD1_2", 4.0e-4), ("CD2_1", 3.5e-4), ("CD2_2", 2.2e-3),
        ("RADESYS", "ICRS"), ("A_ORDER", 3)] + a + [("B_ORDER", 3)] + b + inv)
    h["tan_sip_pc_galactic"] = simple((240, 180), ("GLON-TAN-SIP", "GLAT-TAN-SIP"),
                                      (120.0, 90.5), (318.25, -1.75), [
        ("PC1_1", 0.96), ("PC1_2", -0.28), ("PC2_1", 0.28), ("PC2_2", 0.96),
        ("A_ORDER", 2)] + a[:3] + [("B_ORDER", 2)] + b[:3], cdelt=(-1.5e-3, 1.5e-3))
    h["tan_sip_lat_first"] = simple((160, 200), ("DEC--TAN-SIP", "RA---TAN-SIP"),
                                    (80.5, 100.5), (-27.5, 201.375), [
        ("CD1_1", 1.8e-3), ("CD1_2", 2.0e-4), ("CD2_1", -2.5e-4), ("CD2_2", -1.9e-3),
        ("A_ORDER", 3)] + a + [("B_ORDER", 3)] + b)
    # CUNIT spelt 'degree' and 'DEGREES': WCSLIB's unit fixes (as astropy applies them) read
    # both as deg.
    h["tan_cunit_degree"] = simple((120, 100), t(eq, "TAN"), (60.5, 50.5), (83.8125, -5.375),
                                   cdelt=(-0.002, 0.002), cunit=("degree", "DEGREES"))
    # CTYPEs without a projection code: WCSLIB reads longitude and latitude linear in the
    # pixels (a CD matrix, and a reference latitude away from the equator, where a pixel's
    # size on the sky along longitude shrinks by cos(latitude)).
    h["linear_radec"] = simple((200, 150), ("RA", "DEC"), (100.5, 75.5), (83.8125, -5.375),
                               [("RADESYS", "ICRS")], cdelt=(-0.01, 0.01))
    h["linear_glon_glat_cd"] = simple((200, 150), ("GLON", "GLAT"), (100.5, 75.5), (30.0, 60.0),
                                      [("CD1_1", -0.02), ("CD1_2", 0.005), ("CD2_1", 0.004),
                                       ("CD2_2", 0.02)])
    return {k: cards_of(v) for k, v in h.items()}


def off_sky_centre_maps():
    """Maps whose centre pixel lies outside the projection's domain: an AIT galactic map
    with its reference pixel off the map's left edge, and an HPX map with its reference pixel
    on the map. For each, astropy's pixel -> sky of the map centre (NaN: off the sky) and of
    every pixel centre; the pixel where cairn takes the map's scales by its rule (the centre
    when on the sky, else the reference pixel when on the map and the sky, else the pixel
    centre with a finite position nearest the reference pixel, ties to the lower y, then the
    lower x); its position, and the pixel scales and solid angle there by the five-point
    stencil of local_jacobian."""
    maps = {
        "ait_centre_off_sky": simple((200, 200), ("GLON-AIT", "GLAT-AIT"), (-60.0, 100.5),
                                     (0.0, 0.0), cdelt=(-1.2, 1.2)),
        "hpx_centre_off_sky": simple((200, 200), ("GLON-HPX", "GLAT-HPX"), (20.5, 20.5),
                                     (0.0, 0.0), cdelt=(-1.0, 1.0)),
    }
    out = {}
    for name, pairs in maps.items():
        cards = cards_of(pairs)
        w = WCS(fits.Header.fromstring("".join(cards)))
        nx, ny = pairs[1][1], pairs[2][1]
        cx, cy = (nx - 1) / 2, (ny - 1) / 2
        rx, ry = w.wcs.crpix[0] - 1, w.wcs.crpix[1] - 1
        yy, xx = np.mgrid[0:ny, 0:nx]
        lon, lat = pix2world(w, xx.ravel(), yy.ravel())
        on = np.isfinite(lon) & np.isfinite(lat)
        clon, clat = pix2world(w, [cx], [cy])
        assert not np.isfinite(clon[0]), name
        rlon, rlat = pix2world(w, [rx], [ry])
        if -0.5 <= rx <= nx - 0.5 and -0.5 <= ry <= ny - 0.5 and np.isfinite(rlon[0]):
            x, y, plon, plat = rx, ry, rlon[0], rlat[0]
        else:
            d2 = (xx.ravel() - rx) ** 2 + (yy.ravel() - ry) ** 2
            order = np.lexsort((xx.ravel(), yy.ravel(), d2))
            best = next(i for i in order if on[i])
            x, y = float(xx.ravel()[best]), float(yy.ravel()[best])
            plon, plat = lon[best], lat[best]
        jx, jy = local_jacobian(w, x, y)
        out[name] = {
            "cards": cards,
            "nx": nx, "ny": ny,
            "centre_lon_lat": [clon[0], clat[0]],
            "fraction_on_sky": float(on.mean()),
            "scale_pixel": [x, y],
            "lon": float(plon), "lat": float(plat),
            "solid_angle_sr": float(np.linalg.norm(np.cross(jx, jy))),
            "scale_x_deg": float(np.degrees(np.linalg.norm(jx))),
            "scale_y_deg": float(np.degrees(np.linalg.norm(jy))),
        }
    return out


def astropy_map_headers():
    """The projection test headers shipped with astropy, WCS cards only, named by code."""
    maps = os.path.join(os.path.dirname(astropy.__file__), "wcs", "tests", "data", "maps")
    out = {}
    for path in sorted(glob.glob(os.path.join(maps, "*.hdr"))):
        code = os.path.basename(path).rsplit("_", 1)[1].split(".")[0]
        if code not in SUPPORTED:
            continue
        with open(path) as f:
            text = f.read()
        hdr = fits.Header.fromstring(text)
        cards = [c.image for c in hdr.cards
                 if c.keyword.startswith(WCS_KEYS) and c.keyword not in ("BITPIX",)]
        out["astropy_maps_" + code] = cards
    return out


def unit_vectors(lon, lat):
    lon = np.radians(lon)
    lat = np.radians(lat)
    return np.stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)], -1)


def pix2world(w, x, y):
    """astropy pixel -> sky (origin 0) of the two celestial axes; with SIP polynomials
    all_pix2world, which applies them (wcs_pix2world would not)."""
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    if w.sip is not None:
        lon, lat = w.all_pix2world(x, y, 0)
    elif w.naxis == 2:
        lon, lat = w.wcs_pix2world(x, y, 0)
    else:
        out = w.wcs_pix2world(x, y, *([np.zeros_like(x)] * (w.naxis - 2)), 0)
        lon, lat = out[0], out[1]
    if w.wcs.lng == 1:
        lon, lat = lat, lon
    return lon, lat


def world2pix(w, lon, lat):
    lon = np.asarray(lon, float)
    lat = np.asarray(lat, float)
    a, b = (lat, lon) if w.wcs.lng == 1 else (lon, lat)
    if w.sip is not None:
        # astropy inverts the SIP polynomials iteratively; asked here for 1e-12 pixel.
        x, y = w.all_world2pix(a, b, 0, tolerance=1e-12, maxiter=200)
    elif w.naxis == 2:
        x, y = w.wcs_world2pix(a, b, 0)
    else:
        out = w.wcs_world2pix(a, b, *([np.full_like(a, w.wcs.crval[k])
                                        for k in range(2, w.naxis)]), 0)
        x, y = out[0], out[1]
    return x, y


def local_jacobian(w, x, y):
    """Five-point central differences of the sky unit vector in pixel x and y, with a step
    of half a pixel or 1e-3 rad on the sky, whichever is smaller."""
    size = np.sqrt(abs(np.linalg.det(w.celestial.pixel_scale_matrix)))  # deg per pixel
    h = min(0.5, np.degrees(1e-3) / size)

    def d(dx, dy):
        pts = [pix2world(w, [x + k * dx], [y + k * dy]) for k in (-2, -1, 1, 2)]
        n = [unit_vectors(p[0][0], p[1][0]) for p in pts]
        return (n[0] - 8 * n[1] + 8 * n[2] - n[3]) / (12 * h)
    return d(h, 0.0), d(0.0, h)


def frame_name(w):
    try:
        f = wcs_to_celestial_frame(w)
    except ValueError:
        return {"name": "unknown"}
    name = f.name
    out = {"name": name}
    if hasattr(f, "equinox") and name in ("fk5", "fk4"):
        out["equinox"] = float(f.equinox.jyear if name == "fk5" else f.equinox.byear)
    return out


def compute(name, cards):
    hdr = fits.Header.fromstring("".join(cards))
    w = WCS(hdr)
    n1 = hdr.get("NAXIS1", 100)
    n2 = hdr.get("NAXIS2", 100)
    # A grid reaching a tenth of the map beyond each edge, plus the reference pixel.
    gx = np.linspace(-0.1 * n1, 1.1 * n1 - 1, 11)
    gy = np.linspace(-0.1 * n2, 1.1 * n2 - 1, 11)
    xx, yy = np.meshgrid(gx, gy)
    xs = list(xx.ravel()) + [w.wcs.crpix[0] - 1]
    ys = list(yy.ravel()) + [w.wcs.crpix[1] - 1]
    lon, lat = pix2world(w, xs, ys)
    ok = np.isfinite(lon) & np.isfinite(lat)
    bx = np.full(len(xs), np.nan)
    by = np.full(len(xs), np.nan)
    if ok.any():
        bx[ok], by[ok] = world2pix(w, lon[ok], lat[ok])
    cel = w.celestial
    area_ref = proj_plane_pixel_area(cel)  # deg^2 per pixel, |det| of the CD matrix
    # Off-reference solid angles and scales at pixels inside the map whose stencil is valid.
    off = []
    for fx, fy in [(0.05, 0.1), (0.5, 0.5), (0.9, 0.2), (0.2, 0.85), (0.95, 0.95), (0.0, 0.5)]:
        px, py = fx * (n1 - 1), fy * (n2 - 1)
        jx, jy = local_jacobian(w, px, py)
        if not (np.all(np.isfinite(jx)) and np.all(np.isfinite(jy))):
            continue
        off.append({"x": px, "y": py,
                    "solid_angle_sr": float(np.linalg.norm(np.cross(jx, jy))),
                    "scale_x_deg": float(np.degrees(np.linalg.norm(jx))),
                    "scale_y_deg": float(np.degrees(np.linalg.norm(jy)))})
    rx, ry = w.wcs.crpix[0] - 1, w.wcs.crpix[1] - 1
    jx, jy = local_jacobian(w, rx, ry)
    ref_stencil = float(np.linalg.norm(np.cross(jx, jy)))
    return {
        "cards": cards,
        "ref_stencil_sr": ref_stencil,
        "projection": w.wcs.ctype[0][5:8] if w.wcs.lng == 0 else w.wcs.ctype[1][5:8],
        "frame": frame_name(w),
        "x": xs, "y": ys, "lon": lon, "lat": lat, "back_x": bx, "back_y": by,
        "crpix0": [w.wcs.crpix[0] - 1, w.wcs.crpix[1] - 1],
        "ref_pixel_area_deg2": area_ref,
        "off_reference": off,
    }


def frames():
    rng = np.random.default_rng(20260112)
    lon = np.concatenate([rng.uniform(0, 360, 40), [0.0, 90.0, 180.0, 270.0, 359.9, 12.0]])
    lat = np.concatenate([np.degrees(np.arcsin(rng.uniform(-1, 1, 40))),
                          [0.0, 89.99, -89.99, 45.0, -30.0, 60.0]])
    out = {"lon": lon, "lat": lat}
    frames_ = {"icrs": "icrs", "galactic": "galactic", "fk5": FK5(equinox="J2000"),
               "fk5_1975": FK5(equinox="J1975"), "fk5_2030": FK5(equinox="J2030")}
    for src in frames_:
        for dst in frames_:
            if src == dst:
                continue
            c = SkyCoord(lon * u.deg, lat * u.deg, frame=frames_[src]).transform_to(frames_[dst])
            if dst == "galactic":
                a, b = c.l.deg, c.b.deg
            else:
                a, b = c.ra.deg, c.dec.deg
            out[f"{src}_to_{dst}"] = {"lon": a, "lat": b}
    # FK4 (with its E-terms; epoch of observation = equinox, astropy's default) to the others,
    # through FK4NoETerms at the catalogue's own equinox: the E-terms are removed there, then
    # astropy's FK4NoETerms transforms apply. (This is the route astropy itself takes to ICRS
    # and galactic. Its one-step transform_to(FK5(...)) takes another internal route, whose
    # results differ from FK4 -> ICRS -> FK5 by up to about 2e-8 degree, 5e-9 at J2000:
    # measured with astropy 8.0.2 on these positions.)
    for src, eq in (("fk4", "B1950"), ("fk4_1975", "B1975")):
        for dst in frames_:
            c = (SkyCoord(lon * u.deg, lat * u.deg, frame=FK4(equinox=eq))
                 .transform_to(FK4NoETerms(equinox=eq)).transform_to(frames_[dst]))
            if dst == "galactic":
                a, b = c.l.deg, c.b.deg
            else:
                a, b = c.ra.deg, c.dec.deg
            out[f"{src}_to_{dst}"] = {"lon": a, "lat": b}
    return out


def main():
    base = out_dir("wcs")
    headers = invented_headers()
    headers.update(astropy_map_headers())
    results = {name: compute(name, cards) for name, cards in sorted(headers.items())}
    write_json(os.path.join(base, "projections.json"), {
        "source": f"astropy {astropy.__version__} astropy.wcs (WCSLIB), origin=0",
        "headers": results,
    })
    write_json(os.path.join(base, "scale_pixel.json"), {
        "source": f"astropy {astropy.__version__} astropy.wcs (WCSLIB), origin=0",
        "maps": off_sky_centre_maps(),
    })
    write_json(os.path.join(base, "frames.json"), {
        "source": f"astropy {astropy.__version__} astropy.coordinates.SkyCoord",
        **frames(),
    })


if __name__ == "__main__":
    main()

"""Where a --region centre given in another frame lands on two invented maps.

Source: astropy 8.0.2 astropy.coordinates (SkyCoord in ICRS, FK5 J2000 and Galactic, converted
to the map's frame: Galactic, or FK5 at equinox J1975) and astropy.wcs.WCS.all_world2pix
(origin 0) on the map's header. The positions are invented, typed as a user would (a few
decimals); tests/draw_checks.rs reads each centre with its frame named first and compares the
pixel cairn places it at with astropy's, and tests/draw_runs.rs draws a region around one and
around astropy's position in the map's frame.
"""
import os

import astropy
import astropy.units as u
from astropy.coordinates import FK5, Galactic, ICRS, SkyCoord
from astropy.io import fits
from astropy.wcs import WCS

from common import out_dir, write_json

OUT = out_dir("draw")


def header(cards):
    h = fits.Header()
    for k, v in cards:
        h[k] = v
    return h


# name: (nx, ny, WCS cards, the map's frame in astropy, [(prefix, frame, lon, lat)])
maps = {
    "galactic_tan": (300, 240, [
        ("CTYPE1", "GLON-TAN"), ("CTYPE2", "GLAT-TAN"),
        ("CRPIX1", 150.5), ("CRPIX2", 120.5), ("CRVAL1", 231.5), ("CRVAL2", -4.25),
        ("CDELT1", -6.0 / 3600), ("CDELT2", 6.0 / 3600), ("CUNIT1", "deg"), ("CUNIT2", "deg"),
    ], Galactic(), [
        ("icrs", ICRS(), 107.6125, -18.4375),
        ("fk5", FK5(equinox="J2000"), 107.65, -18.48),
    ]),
    "fk5_j1975_tan": (300, 240, [
        ("CTYPE1", "RA---TAN"), ("CTYPE2", "DEC--TAN"), ("RADESYS", "FK5"), ("EQUINOX", 1975.0),
        ("CRPIX1", 150.5), ("CRPIX2", 120.5), ("CRVAL1", 201.375), ("CRVAL2", -31.625),
        ("CDELT1", -6.0 / 3600), ("CDELT2", 6.0 / 3600), ("CUNIT1", "deg"), ("CUNIT2", "deg"),
    ], FK5(equinox="J1975"), [
        ("galactic", Galactic(), 311.72, 30.55),
        ("icrs", ICRS(), 201.75, -31.7),
        ("fk5", FK5(equinox="J2000"), 201.7, -31.72),
    ]),
}

result = {}
for name, (nx, ny, cards, frame, cases) in maps.items():
    h = header(cards)
    # The WCS as read back from the card images stored for cairn (CDELT written to the
    # 20 characters of a card), so both read the same numbers.
    images = [c.image for c in h.cards]
    w = WCS(fits.Header.fromstring("".join(images)))
    out = []
    for prefix, given, lon, lat in cases:
        c = SkyCoord(lon * u.deg, lat * u.deg, frame=given).transform_to(frame)
        sph = c.spherical
        ml, mb = sph.lon.to_value(u.deg), sph.lat.to_value(u.deg)
        x, y = w.all_world2pix([[ml, mb]], 0)[0]
        assert -0.5 < x < nx - 0.5 and -0.5 < y < ny - 0.5, (name, prefix, x, y)
        out.append({"prefix": prefix, "lon": lon, "lat": lat, "map_lon": ml, "map_lat": mb,
                    "x": x, "y": y})
    result[name] = {"cards": images, "nx": nx, "ny": ny, "cases": out}

write_json(os.path.join(OUT, "region_frames.json"),
           {"astropy": astropy.__version__, "maps": result})

"""Sky coordinates along the frame of two invented maps, for checking figure ticks.

Source: astropy 8.0.2 astropy.wcs.WCS.all_pix2world (origin 0). For a rotated TAN map in ICRS
and a galactic CAR map, the script samples every 0.25 pixel along the four frame edges (the
outer pixel boundaries: x or y = -0.5 and n - 0.5) and stores the longitude and latitude
there; tests/draw_checks.rs finds where each of cairn's labelled tick values crosses the edge
according to astropy and compares with cairn's tick position.
"""
import os

import numpy as np
from astropy.io import fits
from astropy.wcs import WCS

from common import out_dir, write_json

OUT = out_dir("draw")


def header(cards):
    h = fits.Header()
    for k, v in cards:
        h[k] = v
    return h


maps = {
    "rotated_tan": (220, 160, [
        ("NAXIS", 2), ("NAXIS1", 220), ("NAXIS2", 160),
        ("CTYPE1", "RA---TAN"), ("CTYPE2", "DEC--TAN"), ("RADESYS", "ICRS"),
        ("CRPIX1", 110.5), ("CRPIX2", 80.5), ("CRVAL1", 233.7125), ("CRVAL2", -18.35),
        ("CDELT1", -5.0 / 3600), ("CDELT2", 5.0 / 3600), ("CROTA2", 25.0),
        ("CUNIT1", "deg"), ("CUNIT2", "deg"),
    ]),
    "galactic_car": (240, 180, [
        ("NAXIS", 2), ("NAXIS1", 240), ("NAXIS2", 180),
        ("CTYPE1", "GLON-CAR"), ("CTYPE2", "GLAT-CAR"),
        ("CRPIX1", 120.5), ("CRPIX2", 90.5), ("CRVAL1", 47.25), ("CRVAL2", 0.0),
        ("CDELT1", -0.01), ("CDELT2", 0.01), ("CUNIT1", "deg"), ("CUNIT2", "deg"),
    ]),
}

result = {}
for name, (nx, ny, cards) in maps.items():
    h = header(cards)
    w = WCS(h)
    card_images = [c.image for c in h.cards]
    edges = {}
    for edge in ("bottom", "top", "left", "right"):
        if edge in ("bottom", "top"):
            t = np.arange(-0.5, nx - 0.5 + 1e-9, 0.25)
            y = -0.5 if edge == "bottom" else ny - 0.5
            px = np.column_stack([t, np.full_like(t, y)])
        else:
            t = np.arange(-0.5, ny - 0.5 + 1e-9, 0.25)
            x = -0.5 if edge == "left" else nx - 0.5
            px = np.column_stack([np.full_like(t, x), t])
        world = w.all_pix2world(px, 0)
        edges[edge] = {"pos": t, "lon": world[:, 0], "lat": world[:, 1]}
    result[name] = {"cards": card_images, "nx": nx, "ny": ny, "edges": edges}

write_json(os.path.join(OUT, "ticks.json"), {"astropy": __import__("astropy").__version__, "maps": result})

"""Reference measurements of cairn's structures, made on cairn's own label map.

Inputs (made by cairn, see examples/make_segment_fixture.rs): fixtures/segment/map.fits, and
run/labels.fits, run/hierarchy.json, run/structures.csv under fixtures/segment/.

For every structure, its pixels are those whose smallest structure is it or one of its
descendants (from hierarchy.json). Sources:
* scikit-image 0.26.0 skimage.measure.regionprops on the structure's mask with the map as
  intensity image: area, centroid, centroid_weighted, moments_weighted_central (weighted
  covariance = mu / mu00), orientation, axis_major_length and axis_minor_length (unweighted,
  4 standard deviations). regionprops' orientation is the angle between the rows axis and
  the major axis; the direction of that axis in (column, row) is (sin o, cos o).
* astropy 8.0.2 astropy.wcs.WCS.all_pix2world (origin 0) of cairn's catalogue pixel
  positions (peak_x, peak_y and the weighted centroid x, y), and the centroid in galactic
  coordinates from astropy.coordinates.SkyCoord (the map is ICRS) .galactic.
* astropy 8.0.2 astropy.units (FITS format) on every TUNIT of cairn's run/structures.fits,
  and each divided by the map's BUNIT; the same for cairn's spelling of a sum over pixels
  for other map units (fixtures/segment/pixel_sum_units.json).
* astropy 8.0.2 astropy.io.votable on cairn's run/structures.vot: each annotated field's UCD,
  whether astropy.io.votable.ucd.check_ucd accepts it against the IVOA controlled vocabulary,
  and the system and equinox of the COOSYS it refers to.
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

sky = {}
for r in rows:
    px, py = float(r["peak_x"]), float(r["peak_y"])
    cx, cy = float(r["x"]), float(r["y"])
    (plon, plat), (clon, clat) = wcs.all_pix2world([[px, py], [cx, cy]], 0)
    g = SkyCoord(clon * u.deg, clat * u.deg, frame="icrs").galactic
    sky[r["id"]] = {"peak_lon": plon, "peak_lat": plat, "lon": clon, "lat": clat,
                    "glon": g.l.deg, "glat": g.b.deg}

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

import astropy
import skimage

write_json(os.path.join(OUT, "reference.json"), {
    "skimage": skimage.__version__,
    "astropy": astropy.__version__,
    "regionprops": result,
    "sky": sky,
    "votable_ucds": ucds,
    "fits_units": units,
    "pixel_sum_units_over_map_unit": pixel_sums,
})

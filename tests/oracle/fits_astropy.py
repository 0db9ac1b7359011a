"""FITS images of every BITPIX, written and read back by astropy, for cairn's map loader.

Source: astropy 8.0.2 astropy.io.fits (pinned in requirements.txt). For each BITPIX in
8, 16, 32, 64, -32, -64 the script writes a small image with BSCALE/BZERO (and BLANK for the
integer types, NaN for the float types), then reads it back with astropy and stores the
values astropy returns (scaled, missing pixels as NaN) in fixtures/fits/values.json.
Also written (see the end of the script for the spectral cubes): a file whose primary HDU is empty with the image in a named extension, a 3-D
image with a length-1 third axis, a real cube, a one-dimensional array, tile-compressed images
and a gzip-compressed file. Pixel values are invented.
"""
import os

import numpy as np
from astropy.io import fits

from common import out_dir, write_json

OUT = out_dir("fits")
NX, NY = 7, 5


def base_header(unit="MJy/sr"):
    h = fits.Header()
    h["BUNIT"] = unit
    return h


def pattern(seed):
    rng = np.random.default_rng(seed)
    return rng.integers(0, 200, size=(NY, NX))


def write(name, hdul):
    path = os.path.join(OUT, name)
    hdul.writeto(path, overwrite=True, output_verify="exception")
    return path


def read_values(path, ext=None):
    with fits.open(path) as hdul:
        hdu = hdul[ext] if ext is not None else hdul[0]
        data = np.asarray(hdu.data, dtype=np.float64)
    return data


results = {}
ints = {8: np.uint8, 16: np.int16, 32: np.int32, 64: np.int64}
for bitpix, dtype in ints.items():
    raw = pattern(bitpix).astype(dtype)
    blank = 7 if bitpix == 8 else -99
    raw[1, 2] = blank
    raw[4, 6] = blank
    h = base_header()
    hdu = fits.PrimaryHDU(raw, header=h)
    # Integer data with scaling keywords: physical = BZERO + BSCALE * stored.
    hdu.header["BSCALE"] = 0.25
    hdu.header["BZERO"] = -3.5
    hdu.header["BLANK"] = blank
    hdu.header["BUNIT"] = "MJy/sr"
    name = f"bitpix_{bitpix}.fits"
    # The keywords are set after the HDU is built from the integers, so astropy writes the
    # integers unchanged and the keywords as given (checked just below by reading the file
    # back unscaled).
    path = write(name, fits.HDUList([hdu]))
    with fits.open(path, do_not_scale_image_data=True) as hdul:
        assert np.array_equal(hdul[0].data, raw), name
        assert (hdul[0].header["BSCALE"], hdul[0].header["BZERO"]) == (0.25, -3.5), name
        assert hdul[0].header["BLANK"] == blank, name
    with fits.open(path) as hdul:
        data = hdul[0].data.astype(np.float64)  # astropy applies BSCALE/BZERO, BLANK -> NaN
    results[name] = {"bitpix": bitpix, "shape": [NY, NX], "values": data.ravel()}

for bitpix, dtype in {-32: np.float32, -64: np.float64}.items():
    raw = (pattern(-bitpix).astype(np.float64) / 3.0).astype(dtype)
    raw[0, 0] = np.nan
    raw[3, 5] = np.nan
    hdu = fits.PrimaryHDU(raw, header=base_header())
    hdu.header["BSCALE"] = 2.0
    hdu.header["BZERO"] = 1.0
    name = f"bitpix_{bitpix}.fits"
    path = write(name, fits.HDUList([hdu]))
    with fits.open(path) as hdul:
        data = hdul[0].data.astype(np.float64)
    results[name] = {"bitpix": bitpix, "shape": [NY, NX], "values": data.ravel()}

# Image in a named extension after an empty primary HDU, and a second image extension.
sig = (pattern(3) * 0.5).astype(np.float32)
other = (pattern(4) * 2.0).astype(np.float32)
hdul = fits.HDUList([
    fits.PrimaryHDU(),
    fits.ImageHDU(sig, header=base_header("Jy/beam"), name="SIGNAL"),
    fits.ImageHDU(other, header=base_header("Jy/beam"), name="ERROR"),
])
write("extensions.fits", hdul)
results["extensions.fits"] = {
    "hdu1": read_values(os.path.join(OUT, "extensions.fits"), 1).ravel(),
    "hdu2": read_values(os.path.join(OUT, "extensions.fits"), "ERROR").ravel(),
    "shape": [NY, NX],
}

# 3-D with a length-1 spectral axis, and a real cube of 4 planes.
d3 = (pattern(5) * 1.0).astype(np.float32)[None, :, :]
h = base_header("cm-2")
h["CTYPE3"] = "FREQ"
write("squeeze3d.fits", fits.HDUList([fits.PrimaryHDU(d3, header=h)]))
results["squeeze3d.fits"] = {"values": read_values(os.path.join(OUT, "squeeze3d.fits"))[0].ravel(), "shape": [NY, NX]}
cube = np.stack([pattern(10 + k) * 1.0 for k in range(4)]).astype(np.float32)
h = base_header("cm-2")
h["CTYPE3"] = "VRAD"
write("cube.fits", fits.HDUList([fits.PrimaryHDU(cube, header=h)]))
results["cube.fits"] = {"plane2": read_values(os.path.join(OUT, "cube.fits"))[2].ravel(), "shape": [NY, NX], "planes": 4}

# Compressed files, after an empty primary HDU and with a sky header: a tile-compressed 16-bit
# integer image (RICE_1, lossless), and a 32-bit float image quantised with subtractive
# dithering (RICE_1 with astropy's defaults but a fixed dithering seed, so that the file is the
# same on every run; large enough that no tile falls back to gzip, whose streams carry the
# time); and a gzip-compressed copy of bitpix_-32.fits. The reference is what astropy
# decompresses.
h = base_header("Jy/beam")
h["CTYPE1"], h["CTYPE2"] = "RA---TAN", "DEC--TAN"
h["CRPIX1"], h["CRPIX2"] = 4.0, 3.0
h["CRVAL1"], h["CRVAL2"] = 150.0, 10.0
h["CDELT1"], h["CDELT2"] = -6 / 3600, 6 / 3600
ints16 = pattern(12).astype(np.int16) - 50
noisy = (np.random.default_rng(13).normal(10.0, 3.0, size=(48, 64))).astype(np.float32)
noisy[5, 7] = np.nan
for name, image, extra in (("compressed_int.fits.fz", ints16, {}),
                           ("compressed_float.fits.fz", noisy, {"dither_seed": 1})):
    write(name, fits.HDUList([fits.PrimaryHDU(),
                              fits.CompImageHDU(image, header=h, compression_type="RICE_1", **extra)]))
    results[name] = {"values": read_values(os.path.join(OUT, name), 1).ravel(),
                     "shape": list(image.shape), "written": image.astype(np.float64).ravel()}
# The INHERIT convention: the image extension has INHERIT = T and only its own CRVAL1; BUNIT,
# the rest of the WCS and the beam are in the primary header. astropy applies no inheritance,
# so the reference is astropy.wcs on the header the convention makes (the primary's cards the
# extension lacks, but the structural ones, added to the extension's): the sky position of
# pixel (2, 1), 0-based.
prim = fits.Header()
prim["BUNIT"] = "MJy/sr"
prim["CTYPE1"], prim["CTYPE2"] = "RA---TAN", "DEC--TAN"
prim["CRPIX1"], prim["CRPIX2"] = 4.0, 3.0
prim["CRVAL1"], prim["CRVAL2"] = 150.0, 10.0
prim["CDELT1"], prim["CDELT2"] = -6 / 3600, 6 / 3600
prim["BMAJ"], prim["BMIN"], prim["BPA"] = 18 / 3600, 18 / 3600, 0.0
ext = fits.Header()
ext["INHERIT"] = True
ext["CRVAL1"] = 150.5
write("inherit.fits", fits.HDUList([fits.PrimaryHDU(header=prim),
                                    fits.ImageHDU(sig, header=ext, name="SCI")]))
with fits.open(os.path.join(OUT, "inherit.fits")) as hdul:
    merged = hdul[1].header.copy()
    for card in hdul[0].header.cards:
        if card.keyword not in merged and card.keyword not in ("SIMPLE", "BITPIX", "EXTEND") \
                and not card.keyword.startswith("NAXIS"):
            merged[card.keyword] = card.value
from astropy.wcs import WCS as _WCS  # noqa: E402

lon, lat = _WCS(merged).wcs_pix2world([[2.0, 1.0]], 0)[0]
results["inherit.fits"] = {"pixel": [2.0, 1.0], "lon": lon, "lat": lat, "unit": "MJy/sr"}

import gzip  # noqa: E402
import shutil  # noqa: E402

with open(os.path.join(OUT, "bitpix_-32.fits"), "rb") as src, \
        gzip.GzipFile(os.path.join(OUT, "gzipped.fits.gz"), "wb", mtime=0) as dst:
    shutil.copyfileobj(src, dst)
results["gzipped.fits.gz"] = {"values": read_values(os.path.join(OUT, "gzipped.fits.gz")).ravel(),
                              "shape": [NY, NX]}

write("line1d.fits", fits.HDUList([fits.PrimaryHDU(np.arange(10, dtype=np.float32), header=base_header())]))

write_json(os.path.join(OUT, "values.json"), {"astropy": __import__("astropy").__version__, "files": results})

# Cubes whose planes lie at different frequencies or wavelengths, and the value astropy.wcs
# gives for each plane (WCS(header).spectral.pixel_to_world(plane), zero-based plane), in
# fixtures/fits/spectral.json: a linear FREQ axis in Hz (the case of a wide-band cube), a
# WAVE axis in um with PC3_3 and CDELT3 and a RESTFRQ that must not be used, a FREQ-LOG
# axis in GHz with a CD matrix, and two maps whose spectral axis has one pixel (squeezed on
# loading) away from the reference pixel.
from astropy import units as u  # noqa: E402
from astropy.wcs import WCS  # noqa: E402


def sky_header(unit, cd=False):
    h = base_header(unit)
    h["CTYPE1"], h["CTYPE2"] = "RA---TAN", "DEC--TAN"
    h["CRPIX1"], h["CRPIX2"] = 4.0, 3.0
    h["CRVAL1"], h["CRVAL2"] = 150.0, 10.0
    if cd:
        h["CD1_1"], h["CD1_2"], h["CD2_1"], h["CD2_2"] = -6 / 3600, 0.0, 0.0, 6 / 3600
    else:
        h["CDELT1"], h["CDELT2"] = -6 / 3600, 6 / 3600
    return h


spectral_cubes = {
    "cube_freq.fits": (
        {"CTYPE3": "FREQ", "CUNIT3": "Hz", "CRVAL3": 3.5e11, "CDELT3": 1e11, "CRPIX3": 2.0},
        3,
        False,
    ),
    "cube_wave.fits": (
        {"CTYPE3": "WAVE", "CUNIT3": "um", "CRVAL3": 250.0, "CDELT3": 100.0, "PC3_3": 1.5, "CRPIX3": 1.5,
         "RESTFRQ": 2.3e11},
        4,
        False,
    ),
    "cube_freqlog.fits": (
        {"CTYPE3": "FREQ-LOG", "CUNIT3": "GHz", "CRVAL3": 600.0, "CD3_3": 150.0, "CRPIX3": 1.0},
        3,
        True,
    ),
    # Maps with a length-1 spectral axis whose one pixel is not the reference pixel: the value
    # at p = 1, not CRVAL3 (and not the RESTFRQ).
    "squeeze_freq.fits": (
        {"CTYPE3": "FREQ", "CUNIT3": "GHz", "CRVAL3": 353.0, "CDELT3": 20.0, "CRPIX3": 2.0,
         "RESTFRQ": 3.45e11},
        1,
        False,
    ),
    "squeeze_wave.fits": (
        {"CTYPE3": "WAVE", "CUNIT3": "um", "CRVAL3": 850.0, "CDELT3": -50.0, "CRPIX3": 0.0},
        1,
        True,
    ),
    # No CRPIX3 at all: the standard's default of 0.
    "squeeze_nocrpix.fits": (
        {"CTYPE3": "FREQ", "CUNIT3": "GHz", "CRVAL3": 353.0, "CDELT3": 20.0},
        1,
        False,
    ),
}
spectral = {}
for name, (keys, nplanes, cd) in spectral_cubes.items():
    h = sky_header("MJy/sr", cd)
    for k, v in keys.items():
        h[k] = v
    data = np.stack([pattern(20 + k) * 1.0 for k in range(nplanes)]).astype(np.float32)
    path = write(name, fits.HDUList([fits.PrimaryHDU(data, header=h)]))
    with fits.open(path) as hdul:
        w = WCS(hdul[0].header).spectral
    planes = np.arange(nplanes)
    coord = w.pixel_to_world(planes)
    spectral[name] = {
        "ctype3": keys["CTYPE3"],
        "planes": planes,
        "frequency_hz": np.asarray(coord.to_value("Hz", equivalencies=u.spectral()), dtype=np.float64),
        "wavelength_m": np.asarray(coord.to_value("m", equivalencies=u.spectral()), dtype=np.float64),
    }

write_json(os.path.join(OUT, "spectral.json"), {"astropy": __import__("astropy").__version__, "files": spectral})

"""A Gaussian fit to a point source after cairn's smoothing to a common resolution.

Input (made by cairn, see examples/make_resolution_fixture.rs): fixtures/resolution/smoothed.fits.
Source: astropy 8.0.2 astropy.modeling.models.Gaussian2D fitted with
astropy.modeling.fitting.LevMarLSQFitter; the pixel scale from astropy.wcs.utils.
proj_plane_pixel_scales. Writes the fitted FWHM along both axes in arcsec.
"""
import os
import warnings

import numpy as np
from astropy.io import fits
from astropy.modeling import fitting, models
from astropy.wcs import WCS
from astropy.wcs.utils import proj_plane_pixel_scales

from common import fixtures_dir, out_dir, write_json

OUT = out_dir("resolution")
with fits.open(os.path.join(fixtures_dir(), "resolution", "smoothed.fits")) as h:
    data = h[0].data.astype(np.float64)
    w = WCS(h[0].header)
y, x = np.mgrid[: data.shape[0], : data.shape[1]]
peak = np.unravel_index(np.nanargmax(data), data.shape)
g0 = models.Gaussian2D(amplitude=data[peak], x_mean=peak[1], y_mean=peak[0], x_stddev=2.0, y_stddev=2.0)
with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    g = fitting.LevMarLSQFitter()(g0, x, y, np.nan_to_num(data), maxiter=1000)
scale = proj_plane_pixel_scales(w) * 3600.0  # arcsec per pixel
fwhm = 2.0 * np.sqrt(2.0 * np.log(2.0))
write_json(os.path.join(OUT, "fit.json"), {
    "astropy": __import__("astropy").__version__,
    "fwhm_x_arcsec": abs(g.x_stddev.value) * fwhm * scale[0],
    "fwhm_y_arcsec": abs(g.y_stddev.value) * fwhm * scale[1],
})

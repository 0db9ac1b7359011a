"""Reference values for cairn's clipped noise estimate.

Source: astropy 8.0.2 astropy.stats.sigma_clipped_stats with sigma=3, maxiters=10,
cenfunc='median', stdfunc='mad_std' (the algorithm cairn's noise module implements), and
astropy.stats.mad_std. Maps are invented: seeded Gaussian noise with added bright blobs and
missing pixels, stored as float32 values (cairn's pixel type) and passed to astropy as
float64 so both sides compute in double precision.
"""
import os

import numpy as np
from astropy.stats import mad_std, sigma_clipped_stats

from common import out_dir, write_json

OUT = out_dir("noise")
cases = {}
rng = np.random.default_rng(20261201)
for k, (ny, nx, sigma, n_blobs, missing) in enumerate(
    [(40, 60, 1.0, 0, 0.0), (64, 64, 0.05, 5, 0.02), (50, 70, 3.0e20, 8, 0.1), (33, 47, 2.0, 3, 0.0)]
):
    data = rng.normal(0.0, sigma, size=(ny, nx))
    yy, xx = np.mgrid[0:ny, 0:nx]
    for _ in range(n_blobs):
        cx, cy = rng.uniform(0, nx), rng.uniform(0, ny)
        amp, w = rng.uniform(5, 40) * sigma, rng.uniform(1.5, 4.0)
        data += amp * np.exp(-((xx - cx) ** 2 + (yy - cy) ** 2) / (2 * w * w))
    data = data.astype(np.float32)
    if missing > 0:
        data[rng.uniform(size=data.shape) < missing] = np.nan
    d64 = data.astype(np.float64)
    mean, median, std = sigma_clipped_stats(d64, sigma=3, maxiters=10, cenfunc="median", stdfunc="mad_std")
    finite = d64[np.isfinite(d64)]
    cases[f"case{k}"] = {
        "shape": [ny, nx],
        "values": data.astype(np.float64).ravel(),
        "clipped_mean": mean,
        "clipped_median": median,
        "clipped_std": std,
        "mad_std": mad_std(finite),
    }
write_json(os.path.join(OUT, "sigma_clipped.json"), {"astropy": __import__("astropy").__version__, "cases": cases})

"""Outside reference for cairn's synthetic background (src/synth.rs).

Run as `python tests/oracle/synth_powerspec.py OUTDIR`; reads the map cairn made,
fixtures/synth/background.fits (regenerate it with `cargo run --example
make_synth_fixture`), and writes OUTDIR/synth/powerspec.json and OUTDIR/synth/wcs.json.

powerspec.json: the azimuthally averaged power spectrum of ln N (the Gaussian field that the
generator filters to P(k) ~ k^-index) measured with numpy 2.4.6 FFT: |FFT2(ln N - mean)|^2
averaged in rings of integer |k| (cycles per map, k = 1 .. N/2), and the slope of a
least-squares line through log10 P against log10 k over 2 <= k <= N/4 (the range free of the
lowest, most scattered rings and of the anisotropic corner of the Fourier plane).

wcs.json: world coordinates of a few zero-based pixel positions from the map's header, by
astropy 8.0.2 astropy.wcs.WCS.all_pix2world (origin 0).
"""
import json
import os

import astropy
import numpy as np
from astropy.io import fits
from astropy.wcs import WCS

from common import fixtures_dir, out_dir, write_json

OUT = out_dir("synth")
SRC = os.path.join(fixtures_dir(), "synth")


def powerspec(data):
    field = np.log(data.astype(np.float64))
    field -= field.mean()
    ny, nx = field.shape
    power = np.abs(np.fft.fft2(field)) ** 2
    kx = np.fft.fftfreq(nx) * nx
    ky = np.fft.fftfreq(ny) * ny
    kk = np.hypot(*np.meshgrid(kx, ky))
    ring = np.rint(kk).astype(int)
    kmax = min(nx, ny) // 2
    ks = np.arange(1, kmax + 1)
    p = np.array([power[ring == k].mean() for k in ks])
    sel = (ks >= 2) & (ks <= min(nx, ny) // 4)
    slope, _ = np.polyfit(np.log10(ks[sel]), np.log10(p[sel]), 1)
    return ks, p, float(-slope), [2, min(nx, ny) // 4]


def main():
    with fits.open(os.path.join(SRC, "background.fits")) as hdul:
        data = hdul[0].data
        header = hdul[0].header
    with open(os.path.join(SRC, "background_spec.json")) as f:
        spec = json.load(f)
    ks, p, index, krange = powerspec(data)
    write_json(os.path.join(OUT, "powerspec.json"), {
        "source": f"numpy {np.__version__} fft2 of ln N, ring average, polyfit",
        "requested_index": spec["background"]["spectral_index"],
        "measured_index": index,
        "fit_k_range": krange,
        "k": ks,
        "power": p,
    })
    w = WCS(header)
    pix = [[0.0, 0.0], [255.0, 255.0], [127.5, 127.5], [10.25, 200.75], [240.0, 3.5]]
    world = w.all_pix2world(np.array(pix), 0)
    write_json(os.path.join(OUT, "wcs.json"), {
        "source": f"astropy {astropy.__version__} astropy.wcs all_pix2world, origin 0",
        "pixels": pix,
        "world_deg": world,
    })


if __name__ == "__main__":
    main()

"""Outside references for cairn's hierarchy engine (src/hierarchy/).

Makes small seeded random maps (smoothed noise) and stores each map with reference results
from scikit-image and scipy as fixtures/hierarchy/NAME.json:

* max_tree: regional maxima (leaves of the unsimplified max-tree), connectivity 1 and 2
  (scikit-image 0.26.0 skimage.morphology.max_tree, cross-checked against
  skimage.morphology.local_maxima of the same version);
* h_maxima: the maxima regions of skimage.morphology.h_maxima (scikit-image 0.26.0) for
  several h, connectivity 1 and 2. scikit-image keeps a maximum whose height (dynamic) is
  >= h, and for floats subtracts a small extra 2 * resolution * |image| before the
  reconstruction; cairn keeps a peak whose drop to its merge level is >= prominence. The two
  rules can differ only when a dynamic lies within rounding of h (or for equal peaks), so
  only values of h whose result is the same at h * (1 - 1e-3) and h * (1 + 1e-3) are kept, and
  only on maps whose values are all distinct;
* components: scipy 1.17.1 scipy.ndimage.label of map >= floor for several floors and both
  connectivities, with skimage.measure.regionprops (scikit-image 0.26.0) of each component:
  area, centroid, intensity-weighted centroid, highest and mean value.

Maps are made with numpy 2.4.6 (default_rng) and scipy 1.17.1 (ndimage.gaussian_filter) and
stored as float32 values. Run as `python tests/oracle/hierarchy_skimage.py [OUTDIR]`.
"""
import os

import numpy as np
from scipy import ndimage
from skimage import measure, morphology

from common import out_dir, write_json


def smooth_map(seed, shape, sigma, nan_frac=0.0, quantum=None):
    rng = np.random.default_rng(seed)
    m = ndimage.gaussian_filter(rng.standard_normal(shape), sigma, mode="reflect")
    m = (m - m.min()) / (m.max() - m.min()) * 10.0 + 1.0
    if quantum is not None:
        m = np.round(m / quantum) * quantum  # plateaus and ties
    m = m.astype(np.float32)
    if nan_frac > 0:
        m[rng.random(shape) < nan_frac] = np.nan
    return m


def footprint(conn):
    return ndimage.generate_binary_structure(2, conn)


def regional_maxima_from_max_tree(img, conn):
    """Plateaus (flat linear indices) of the leaves of scikit-image's max-tree."""
    parent, _ = morphology.max_tree(img, connectivity=conn)
    flat = img.ravel()
    par = parent.ravel()
    n = flat.size
    idx = np.arange(n)
    canonical = (par == idx) | (flat[par] != flat)
    node = np.where(canonical, idx, par)  # the canonical pixel of each pixel's node
    has_child = np.zeros(n, bool)
    child = canonical & (par != idx)
    has_child[node[par[child]]] = True
    leaves = np.flatnonzero(canonical & ~has_child)
    regions = [sorted(np.flatnonzero(node == c).tolist()) for c in leaves]
    # Cross-check with skimage.morphology.local_maxima (scikit-image 0.26.0).
    lm = morphology.local_maxima(img, connectivity=conn, allow_borders=True)
    lab, nlab = ndimage.label(lm, structure=footprint(conn))
    other = sorted(sorted(np.flatnonzero(lab.ravel() == i).tolist()) for i in range(1, nlab + 1))
    assert sorted(regions) == other, "max_tree leaves and local_maxima disagree"
    return sorted(regions)


def hmax_regions(img, h, conn):
    hm = morphology.h_maxima(img, h, footprint=footprint(conn))
    lab, nlab = ndimage.label(hm, structure=footprint(conn))
    return sorted(sorted(np.flatnonzero(lab.ravel() == i).tolist()) for i in range(1, nlab + 1))


def h_maxima_refs(img, conn):
    ptp = float(np.ptp(img))
    out = []
    for frac in (0.01, 0.03, 0.06, 0.1, 0.2, 0.35):
        h = frac * ptp
        regs = hmax_regions(img, h, conn)
        if regs == hmax_regions(img, h * (1 - 1e-3), conn) == hmax_regions(img, h * (1 + 1e-3), conn):
            out.append({"h": h, "regions": regs})
    return out


def component_refs(img, conn):
    finite = img[np.isfinite(img)]
    out = []
    for q in (0.3, 0.6, 0.85):
        # A float32 floor: the Rust side recovers it exactly (on plateau maps it often equals
        # pixel values, which tests that pixels at the floor count as above it).
        floor = np.float32(np.quantile(finite, q))
        mask = np.isfinite(img) & (img >= floor)
        floor = float(floor)
        lab, nlab = ndimage.label(mask, structure=footprint(conn))
        props = measure.regionprops(lab, intensity_image=np.nan_to_num(img).astype(np.float64))
        comps = []
        for p in props:
            comps.append({
                "label": p.label,
                "area": int(p.area),
                "centroid": list(p.centroid),
                "centroid_weighted": list(p.centroid_weighted),
                "intensity_max": float(p.intensity_max),
                "intensity_mean": float(p.intensity_mean),
            })
        out.append({"floor": floor, "count": int(nlab), "labels": lab, "components": comps})
    return out


MAPS = [
    # name, seed, shape, sigma, nan fraction, quantum (None = distinct values)
    ("smooth_40x50", 11, (40, 50), 1.5, 0.0, None),
    ("smooth_64x64", 12, (64, 64), 2.0, 0.0, None),
    ("rough_32x32", 13, (32, 32), 0.7, 0.0, None),
    ("holes_48x40", 14, (48, 40), 1.5, 0.04, None),
    ("plateaus_40x40", 15, (40, 40), 1.5, 0.0, 0.5),
    ("plateaus_30x36", 16, (30, 36), 1.0, 0.0, 0.25),
]


def main():
    base = out_dir("hierarchy")
    for name, seed, shape, sigma, nan_frac, quantum in MAPS:
        img = smooth_map(seed, shape, sigma, nan_frac, quantum)
        has_nan = bool(np.isnan(img).any())
        distinct = quantum is None and np.unique(img[np.isfinite(img)]).size == np.isfinite(img).sum()
        ref = {
            "name": name,
            "map": img.astype(np.float64),
            "distinct": bool(distinct),
            "components": {str(c): component_refs(img, c) for c in (1, 2)},
        }
        if not has_nan:
            ref["max_tree_leaves"] = {str(c): regional_maxima_from_max_tree(img, c) for c in (1, 2)}
        if not has_nan and distinct:
            ref["h_maxima"] = {str(c): h_maxima_refs(img, c) for c in (1, 2)}
        write_json(os.path.join(base, name + ".json"), ref)


if __name__ == "__main__":
    main()

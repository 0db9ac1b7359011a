//! Compares the hierarchy engine with outside references stored by
//! `tests/oracle/hierarchy_skimage.py` under `fixtures/hierarchy/`.

mod common;

use cairn::hierarchy::{Connectivity, Hierarchy, Params, build};
use common::{assert_close, fixture_json, num, nums};
use ndarray::Array2;
use serde_json::Value;

const MAPS: [&str; 6] = [
    "smooth_40x50",
    "smooth_64x64",
    "rough_32x32",
    "holes_48x40",
    "plateaus_40x40",
    "plateaus_30x36",
];

fn load(name: &str) -> (Value, Array2<f32>) {
    let v = fixture_json(&format!("hierarchy/{name}.json"));
    let rows: Vec<Vec<f64>> = v["map"].as_array().unwrap().iter().map(nums).collect();
    let (nr, nc) = (rows.len(), rows[0].len());
    let flat: Vec<f32> = rows.iter().flatten().map(|&x| x as f32).collect();
    (v, Array2::from_shape_vec((nr, nc), flat).unwrap())
}

fn conn(key: &str) -> Connectivity {
    match key {
        "1" => Connectivity::Four,
        "2" => Connectivity::Eight,
        other => panic!("unknown connectivity {other}"),
    }
}

fn below_min(map: &Array2<f32>) -> f64 {
    map.iter()
        .filter(|v| !v.is_nan())
        .fold(f64::INFINITY, |a, &v| a.min(v as f64))
        - 1.0
}

/// Linear index of each leaf's peak.
fn leaf_peaks(h: &Hierarchy, ncols: usize) -> Vec<usize> {
    h.structures
        .iter()
        .filter(|s| s.is_leaf())
        .map(|s| s.peak_y * ncols + s.peak_x)
        .collect()
}

/// Checks that the leaves and the reference regions (lists of linear indices) match one to
/// one, each leaf peak lying in exactly one region; returns, for each leaf, its region.
fn match_leaves(peaks: &[usize], regions: &[Vec<usize>], what: &str) -> Vec<usize> {
    assert_eq!(peaks.len(), regions.len(), "{what}: number of leaves");
    let mut used = vec![false; regions.len()];
    peaks
        .iter()
        .map(|p| {
            let hits: Vec<usize> = (0..regions.len())
                .filter(|&r| regions[r].contains(p))
                .collect();
            assert_eq!(
                hits.len(),
                1,
                "{what}: leaf peak {p} lies in {} regions",
                hits.len()
            );
            assert!(!used[hits[0]], "{what}: two leaves in one region");
            used[hits[0]] = true;
            hits[0]
        })
        .collect()
}

fn regions(v: &Value) -> Vec<Vec<usize>> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|i| i.as_u64().unwrap() as usize)
                .collect()
        })
        .collect()
}

/// With floor below the minimum, prominence 0 and min-area 1, the leaves are exactly the
/// regional maxima, i.e. the leaves of scikit-image 0.26.0 `skimage.morphology.max_tree`;
/// on a plateau the peak is the plateau pixel with the lowest linear index (cairn's tie rule).
#[test]
fn leaves_are_the_regional_maxima_of_skimage_max_tree() {
    let mut checked = 0;
    for name in MAPS {
        let (v, map) = load(name);
        let Some(refs) = v.get("max_tree_leaves") else {
            continue;
        };
        let ncols = map.ncols();
        for (c, regs) in refs.as_object().unwrap() {
            let regs = regions(regs);
            let p = Params {
                floor: below_min(&map),
                prominence: 0.0,
                min_area: 1,
                connectivity: conn(c),
            };
            let h = build(map.view(), &p).unwrap();
            let what = format!("{name} connectivity {c}");
            let peaks = leaf_peaks(&h, ncols);
            let matched = match_leaves(&peaks, &regs, &what);
            for (peak, r) in peaks.iter().zip(matched) {
                assert_eq!(
                    *peak,
                    *regs[r].iter().min().unwrap(),
                    "{what}: plateau peak"
                );
            }
            checked += 1;
        }
    }
    assert!(checked >= 8, "only {checked} max-tree references found");
}

/// Leaves for prominence h equal the regions of scikit-image 0.26.0
/// `skimage.morphology.h_maxima` (values of h stored only where both rules agree, see the
/// oracle script).
#[test]
fn leaves_for_prominence_h_are_skimage_h_maxima() {
    let mut checked = 0;
    for name in MAPS {
        let (v, map) = load(name);
        let Some(refs) = v.get("h_maxima") else {
            continue;
        };
        let ncols = map.ncols();
        for (c, list) in refs.as_object().unwrap() {
            for item in list.as_array().unwrap() {
                let hval = num(&item["h"]);
                let regs = regions(&item["regions"]);
                let p = Params {
                    floor: below_min(&map),
                    prominence: hval,
                    min_area: 1,
                    connectivity: conn(c),
                };
                let h = build(map.view(), &p).unwrap();
                let what = format!("{name} connectivity {c} h {hval}");
                match_leaves(&leaf_peaks(&h, ncols), &regs, &what);
                checked += 1;
            }
        }
    }
    assert!(checked >= 20, "only {checked} h-maxima references found");
}

fn root_of(h: &Hierarchy, mut id: u32) -> u32 {
    while let Some(p) = h.structures[id as usize].parent {
        id = p;
    }
    id
}

/// Roots above a floor are the connected components of scipy 1.17.1 `ndimage.label` (same
/// connectivity), pixel for pixel, and their area, centroid, weighted centroid, highest and
/// mean value equal scikit-image 0.26.0 `regionprops` of those components.
#[test]
fn roots_are_scipy_components_with_skimage_regionprops() {
    let mut checked = 0;
    for name in MAPS {
        let (v, map) = load(name);
        let (nrows, ncols) = map.dim();
        for (c, floors) in v["components"].as_object().unwrap() {
            for f in floors.as_array().unwrap() {
                // Stored floors are float32 values; going through f32 undoes any last-bit error
                // of the JSON number parser.
                let floor = num(&f["floor"]) as f32 as f64;
                let what = format!("{name} connectivity {c} floor {floor}");
                let reflab: Vec<i64> = f["labels"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .flat_map(|r| r.as_array().unwrap().iter().map(|x| x.as_i64().unwrap()))
                    .collect();
                let comps = f["components"].as_array().unwrap();
                let p = Params {
                    floor,
                    prominence: 0.0,
                    min_area: 1,
                    connectivity: conn(c),
                };
                let h = build(map.view(), &p).unwrap();
                let roots = h.roots();
                assert_eq!(
                    roots.len() as u64,
                    f["count"].as_u64().unwrap(),
                    "{what}: roots"
                );
                // Each root's component in the reference labelling, one to one.
                let mut comp_of_root = vec![usize::MAX; h.structures.len()];
                let mut seen = vec![false; comps.len() + 1];
                for &r in &roots {
                    let s = &h.structures[r as usize];
                    let l = reflab[s.peak_y * ncols + s.peak_x];
                    assert!(l > 0 && !seen[l as usize], "{what}: root {r} component {l}");
                    seen[l as usize] = true;
                    comp_of_root[r as usize] = l as usize;
                }
                for (i, &l) in h.labels.iter().enumerate() {
                    let want = reflab[i];
                    if l < 0 {
                        assert_eq!(want, 0, "{what}: pixel {i} has no structure");
                    } else {
                        assert_eq!(
                            comp_of_root[root_of(&h, l as u32) as usize] as i64,
                            want,
                            "{what}: pixel {i}"
                        );
                    }
                }
                for &r in &roots {
                    let s = &h.structures[r as usize];
                    let comp = comps
                        .iter()
                        .find(|x| x["label"].as_u64() == Some(comp_of_root[r as usize] as u64))
                        .unwrap();
                    assert_eq!(s.npix, comp["area"].as_u64().unwrap(), "{what}: area");
                    let m = &s.sums;
                    let (cx, cy) = m.centroid();
                    let cen = nums(&comp["centroid"]);
                    assert_close(cy, cen[0], 1e-12, 1e-12, &format!("{what}: centroid row"));
                    assert_close(cx, cen[1], 1e-12, 1e-12, &format!("{what}: centroid col"));
                    let (wx, wy) = m.weighted_centroid();
                    let wc = nums(&comp["centroid_weighted"]);
                    assert_close(wy, wc[0], 1e-10, 1e-10, &format!("{what}: weighted row"));
                    assert_close(wx, wc[1], 1e-10, 1e-10, &format!("{what}: weighted col"));
                    // The JSON parser may be one unit in the last place off.
                    let top = num(&comp["intensity_max"]);
                    assert_close(s.peak_value, top, 1e-15, 0.0, &format!("{what}: peak"));
                    let mean = m.sum / m.n as f64;
                    assert_close(mean, num(&comp["intensity_mean"]), 1e-12, 0.0, &what);
                    let on_edge = h.labels.indexed_iter().any(|((y, x), &l)| {
                        l >= 0
                            && root_of(&h, l as u32) == r
                            && (y == 0 || x == 0 || y + 1 == nrows || x + 1 == ncols)
                    });
                    assert_eq!(s.touches_edge, on_edge, "{what}: edge flag");
                }
                checked += 1;
            }
        }
    }
    assert!(checked >= 30, "only {checked} component references found");
}

/// With a prominence and a minimum area, the roots are the scipy 1.17.1 components whose
/// highest value rises at least the prominence above the floor and whose area reaches the
/// minimum (areas and highest values from scikit-image 0.26.0 regionprops); the pixels of the
/// other components belong to nothing.
#[test]
fn weak_or_small_components_are_not_roots() {
    let mut checked = 0;
    for name in MAPS {
        let (v, map) = load(name);
        let ncols = map.ncols();
        for (c, floors) in v["components"].as_object().unwrap() {
            for f in floors.as_array().unwrap() {
                // Stored floors are float32 values; going through f32 undoes any last-bit error
                // of the JSON number parser.
                let floor = num(&f["floor"]) as f32 as f64;
                let comps = f["components"].as_array().unwrap();
                for (prominence, min_area) in [(0.5, 1usize), (0.0, 6), (0.8, 10)] {
                    let what = format!("{name} c {c} floor {floor} p {prominence} a {min_area}");
                    let keep: Vec<u64> = comps
                        .iter()
                        .filter(|x| {
                            x["area"].as_u64().unwrap() as usize >= min_area
                                && num(&x["intensity_max"]) as f32 as f64 - floor >= prominence
                        })
                        .map(|x| x["label"].as_u64().unwrap())
                        .collect();
                    let p = Params {
                        floor,
                        prominence,
                        min_area,
                        connectivity: conn(c),
                    };
                    let h = build(map.view(), &p).unwrap();
                    assert_eq!(h.roots().len(), keep.len(), "{what}: roots");
                    let reflab: Vec<u64> = f["labels"]
                        .as_array()
                        .unwrap()
                        .iter()
                        .flat_map(|r| r.as_array().unwrap().iter().map(|x| x.as_u64().unwrap()))
                        .collect();
                    for (i, &l) in h.labels.iter().enumerate() {
                        assert_eq!(l >= 0, keep.contains(&reflab[i]), "{what}: pixel {i}");
                    }
                    for r in h.roots() {
                        let s = &h.structures[r as usize];
                        assert!(
                            keep.contains(&reflab[s.peak_y * ncols + s.peak_x]),
                            "{what}"
                        );
                    }
                    checked += 1;
                }
            }
        }
    }
    assert!(checked >= 90, "only {checked} cases");
}

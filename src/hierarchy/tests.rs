//! Unit tests on small hand-made maps.

use super::*;
use ndarray::{Array2, array};

fn params(floor: f64, prominence: f64, min_area: usize, conn: Connectivity) -> Params {
    Params {
        floor,
        prominence,
        min_area,
        connectivity: conn,
    }
}

fn row(v: &[f32]) -> Array2<f32> {
    Array2::from_shape_vec((1, v.len()), v.to_vec()).unwrap()
}

#[test]
fn two_peaks_and_a_saddle() {
    let m = row(&[1.0, 5.0, 2.0, 4.0, 1.0]);
    let h = build(m.view(), &params(0.0, 1.0, 1, Connectivity::Four)).unwrap();
    assert_eq!(h.structures.len(), 3);
    // id 0: root (peak 5, ancestors first), id 1: leaf at 5, id 2: leaf at 4.
    let r = &h.structures[0];
    assert_eq!(
        (r.parent, r.children.clone(), r.peak_x, r.depth),
        (None, vec![1, 2], 1, 0)
    );
    assert_eq!(r.merge_level, None);
    assert_eq!(r.npix, 5);
    assert_eq!(r.npix_own, 3);
    assert_eq!(r.min_value, 1.0);
    let a = &h.structures[1];
    assert_eq!(
        (a.parent, a.peak_x, a.npix, a.merge_level),
        (Some(0), 1, 1, Some(2.0))
    );
    let b = &h.structures[2];
    assert_eq!(
        (b.parent, b.peak_x, b.npix, b.merge_level),
        (Some(0), 3, 1, Some(2.0))
    );
    assert_eq!(h.labels.row(0).to_vec(), vec![0, 1, 0, 2, 0]);
    assert_eq!(h.graph.edge_count(), 2);
    assert_eq!(h.leaves(), vec![1, 2]);
    assert_eq!(h.roots(), vec![0]);
}

#[test]
fn prominence_equal_to_the_drop_is_kept_and_above_it_is_absorbed() {
    let m = row(&[1.0, 5.0, 2.0, 4.0, 1.0]);
    let kept = build(m.view(), &params(0.0, 2.0, 1, Connectivity::Four)).unwrap();
    assert_eq!(kept.leaves().len(), 2);
    let gone = build(m.view(), &params(0.0, 2.5, 1, Connectivity::Four)).unwrap();
    assert_eq!(gone.structures.len(), 1);
    let s = &gone.structures[0];
    assert!(s.is_leaf() && s.parent.is_none());
    assert_eq!((s.peak_x, s.npix), (1, 5));
    assert!(gone.labels.iter().all(|&l| l == 0));
}

#[test]
fn min_area_absorbs_a_narrow_spike() {
    // A one-pixel spike at x=1 beside a broad bump at x=3..5.
    let m = row(&[0.0, 9.0, 1.0, 5.0, 6.0, 5.0, 0.0]);
    let h = build(m.view(), &params(0.5, 1.0, 2, Connectivity::Four)).unwrap();
    assert_eq!(h.structures.len(), 1);
    let s = &h.structures[0];
    // The spike is absorbed: the structure keeps the highest pixel as its peak.
    assert_eq!((s.peak_x, s.npix), (1, 5));
    assert_eq!(h.labels.row(0).to_vec(), vec![-1, 0, 0, 0, 0, 0, -1]);
    let h1 = build(m.view(), &params(0.5, 1.0, 1, Connectivity::Four)).unwrap();
    assert_eq!(h1.leaves().len(), 2);
}

#[test]
fn a_plateau_met_from_two_sides_is_one_peak() {
    let m = array![[5.0f32, 1.0, 5.0], [5.0, 5.0, 5.0]];
    let h = build(m.view(), &params(0.0, 0.0, 1, Connectivity::Four)).unwrap();
    assert_eq!(h.structures.len(), 1);
    assert_eq!((h.structures[0].peak_x, h.structures[0].peak_y), (0, 0));
    assert_eq!(h.structures[0].npix, 6);
}

#[test]
fn three_peaks_meeting_on_one_level_share_one_branch() {
    let m = row(&[9.0, 1.0, 8.0, 1.0, 7.0]);
    let h = build(m.view(), &params(0.0, 0.5, 1, Connectivity::Four)).unwrap();
    assert_eq!(h.structures.len(), 4);
    assert_eq!(h.structures[0].children, vec![1, 2, 3]);
    for c in 1..4 {
        assert_eq!(h.structures[c].merge_level, Some(1.0));
        assert_eq!(h.structures[c].depth, 1);
    }
}

#[test]
fn missing_pixels_and_floor_split_roots() {
    let m = array![[3.0f32, f32::NAN, 4.0], [2.0, f32::NAN, 0.5]];
    let h = build(m.view(), &params(1.0, 0.0, 1, Connectivity::Eight)).unwrap();
    assert_eq!(h.roots().len(), 2);
    assert_eq!(h.labels, array![[1, -1, 0], [1, -1, -1]]);
    assert!(
        h.structures
            .iter()
            .all(|s| s.touches_missing && s.touches_edge)
    );
}

#[test]
fn connectivity_decides_whether_corners_join() {
    let m = array![[2.0f32, 0.0], [0.0, 3.0]];
    let four = build(m.view(), &params(1.0, 0.0, 1, Connectivity::Four)).unwrap();
    assert_eq!(four.roots().len(), 2);
    let eight = build(m.view(), &params(1.0, 0.0, 1, Connectivity::Eight)).unwrap();
    assert_eq!(eight.roots().len(), 1);
    assert_eq!(eight.structures[0].npix, 2);
}

#[test]
fn moments_match_a_direct_sum() {
    let m = array![[1.0f32, 2.0, 0.0], [3.0, 4.0, 0.5], [0.2, 6.0, 1.5]];
    let h = build(m.view(), &params(0.4, 0.0, 1, Connectivity::Four)).unwrap();
    let roots = h.roots();
    assert_eq!(roots.len(), 1);
    let got = h.structures[roots[0] as usize].sums;
    // About the root's peak (column 1, row 2: the value 6).
    assert_eq!((got.x0, got.y0), (1.0, 2.0));
    let mut want = Moments::about(1.0, 2.0);
    for ((y, x), &v) in m.indexed_iter() {
        if v as f64 >= 0.4 {
            want.add(x as f64, y as f64, v as f64);
        }
    }
    assert_eq!(got.n, want.n);
    for (a, b) in [
        (got.sum, want.sum),
        (got.sum2, want.sum2),
        (got.sx, want.sx),
        (got.syy, want.syy),
        (got.sxy, want.sxy),
        (got.uxx, want.uxx),
        (got.uxy, want.uxy),
    ] {
        assert!((a - b).abs() <= 1e-12 * b.abs().max(1.0), "{a} vs {b}");
    }
}

#[test]
fn nothing_left_gives_an_empty_hierarchy() {
    let m = row(&[1.0, 2.0, 1.5]);
    let h = build(m.view(), &params(0.0, 10.0, 1, Connectivity::Four)).unwrap();
    assert!(h.structures.is_empty());
    assert!(h.labels.iter().all(|&l| l == -1));
    assert_eq!(h.graph.node_count(), 0);
}

#[test]
fn bad_thresholds_are_errors_with_one_sentence() {
    let m = row(&[1.0, 2.0, f32::NAN]);
    let p = params(0.0, -1.0, 1, Connectivity::Four);
    let e = build(m.view(), &p).unwrap_err();
    assert_eq!(e, HierarchyError::BadProminence(-1.0));
    assert!(e.to_string().contains("non-negative"));
    let e = build(m.view(), &params(0.0, 0.0, 4, Connectivity::Four)).unwrap_err();
    assert_eq!(
        e,
        HierarchyError::MinAreaTooLarge {
            min_area: 4,
            npix: 3
        }
    );
    let e = build(m.view(), &params(2.5, 0.0, 1, Connectivity::Four)).unwrap_err();
    assert_eq!(
        e,
        HierarchyError::FloorAboveMaximum {
            floor: 2.5,
            max: 2.0
        }
    );
    let nan = row(&[f32::NAN, f32::NAN]);
    let e = build(nan.view(), &params(0.0, 0.0, 1, Connectivity::Four)).unwrap_err();
    assert_eq!(e, HierarchyError::NoValidPixels);
    let e = build(m.view(), &params(f64::NAN, 0.0, 1, Connectivity::Four)).unwrap_err();
    assert_eq!(e, HierarchyError::BadFloor);
}

#[test]
fn progress_runs_from_zero_to_one() {
    let m = row(&[1.0, 5.0, 2.0, 4.0, 1.0]);
    let seen = std::cell::RefCell::new(Vec::new());
    build_with_progress(m.view(), &params(0.0, 1.0, 1, Connectivity::Four), &|f| {
        seen.borrow_mut().push(f)
    })
    .unwrap();
    let seen = seen.into_inner();
    assert_eq!(seen.first(), Some(&0.0));
    assert_eq!(seen.last(), Some(&1.0));
    assert!(seen.windows(2).all(|w| w[0] <= w[1]));
}

#[test]
fn no_core_is_said_free_when_the_build_fails_before_its_sweep() {
    let m = row(&[1.0, 5.0, 2.0]);
    let said = std::sync::atomic::AtomicBool::new(false);
    let e = build_with_hooks(
        m.view(),
        &params(9.0, 0.0, 1, Connectivity::Four),
        &|_| {},
        &|| said.store(true, std::sync::atomic::Ordering::Relaxed),
    )
    .unwrap_err();
    assert!(matches!(e, HierarchyError::FloorAboveMaximum { .. }));
    assert!(!said.into_inner());
}

#[test]
fn non_contiguous_views_give_the_same_result() {
    let m = array![[1.0f32, 5.0, 2.0], [4.0, 1.0, 3.0], [0.0, 2.0, 6.0]];
    let t = m.t().to_owned();
    let p = params(0.0, 0.5, 1, Connectivity::Four);
    let a = build(m.t(), &p).unwrap();
    let b = build(t.view(), &p).unwrap();
    assert_eq!(a.labels, b.labels);
    assert_eq!(a.structures, b.structures);
}

#[test]
fn grown_leaves_cover_everything_above_the_floor() {
    let m = row(&[1.0, 5.0, 2.0, 4.0, 1.0, 0.0, 3.0]);
    let h = build(m.view(), &params(0.5, 1.0, 1, Connectivity::Four)).unwrap();
    let g = grow_leaves(m.view(), &h, 0.5);
    let leaf_at = |x: usize| h.labels[(0, x)];
    // The saddle pixel (value 2) is reached first from the higher side's queue order.
    assert_eq!(g.row(0).to_vec()[..2], [leaf_at(1), leaf_at(1)]);
    assert_eq!(g[(0, 3)], leaf_at(3));
    assert_eq!(g[(0, 4)], leaf_at(3));
    assert_eq!(g[(0, 5)], -1);
    assert_eq!(g[(0, 6)], leaf_at(6));
    assert!(
        g.iter()
            .zip(m.iter())
            .all(|(&l, &v)| (l >= 0) == (v >= 0.5))
    );
}

/// The grown leaves' sums against the same sums added pixel by pixel over the grown plane
/// (`Moments::add` about each leaf's peak), on a map with a missing pixel beside one leaf.
#[test]
fn grown_leaves_carry_the_sums_of_their_grown_pixels() {
    let m = array![
        [0.0f32, 1.0, 2.0, 1.0, 0.0, 1.0, 1.0],
        [1.0, 3.0, 6.0, 2.0, 1.0, 4.0, 2.0],
        [1.0, 2.0, 3.0, 1.5, 2.0, 7.0, f32::NAN],
        [0.0, 1.0, 1.0, 1.0, 1.0, 2.0, 1.0],
    ];
    let h = build(m.view(), &params(0.5, 1.0, 1, Connectivity::Eight)).unwrap();
    let plane = grow_leaves(m.view(), &h, 0.5);
    let g = grown_leaves_hierarchy(m.view(), &h, plane.clone());
    assert_eq!(g.ids, h.leaves());
    assert!(g.ids.len() >= 2, "two peaks, two leaves");
    assert_eq!(g.hierarchy.structures.len(), g.ids.len());
    for (k, &id) in g.ids.iter().enumerate() {
        let leaf = &h.structures[id as usize];
        let s = &g.hierarchy.structures[k];
        assert_eq!((s.id, s.parent, s.merge_level), (k as u32, None, None));
        assert_eq!((s.peak_x, s.peak_y), (leaf.peak_x, leaf.peak_y));
        let mut direct = Moments::about(leaf.peak_x as f64, leaf.peak_y as f64);
        let mut min = f64::INFINITY;
        for ((y, x), &l) in plane.indexed_iter() {
            if l == id as i32 {
                assert_eq!(g.hierarchy.labels[(y, x)], k as i32);
                direct.add(x as f64, y as f64, m[(y, x)] as f64);
                min = min.min(m[(y, x)] as f64);
            }
        }
        assert_eq!(s.npix, direct.n);
        assert!(
            s.npix >= leaf.npix,
            "the grown footprint holds the leaf's own"
        );
        assert_eq!(s.min_value, min);
        let (a, b) = (s.sums.weighted_centroid(), direct.weighted_centroid());
        assert!((a.0 - b.0).abs() < 1e-12 && (a.1 - b.1).abs() < 1e-12);
        assert!((s.sums.sum - direct.sum).abs() < 1e-12);
        let (a, b) = (s.sums.weighted_covariance(), direct.weighted_covariance());
        assert!((a.0 - b.0).abs() < 1e-12 && (a.1 - b.1).abs() < 1e-12);
        assert!((a.2 - b.2).abs() < 1e-12);
    }
    // The pixel at column 5, row 2 (value 7) sits beside the missing one; its leaf says so.
    let k = g.hierarchy.labels[(2, 5)] as usize;
    assert!(g.hierarchy.structures[k].touches_missing);
    assert!(g.hierarchy.structures.iter().all(|s| s.touches_edge));
}

#[test]
fn order_keys_sort_values_and_decode_back() {
    let vals = [
        f32::NEG_INFINITY,
        -3.5,
        -1e-30,
        -0.0,
        0.0,
        1e-30,
        2.0,
        f32::INFINITY,
    ];
    for w in vals.windows(2) {
        assert!(engine::order_key(w[0]) <= engine::order_key(w[1]), "{w:?}");
    }
    assert_eq!(engine::order_key(-0.0), engine::order_key(0.0));
    for v in vals {
        let back = engine::from_order_key(engine::order_key(v));
        assert_eq!(back, v + 0.0);
        assert_eq!(back.to_bits(), (v + 0.0).to_bits());
    }
}

/// The two layouts of the keys (the whole value half on maps of up to 2^24 pixels, only its bits
/// below the bucket digit above, where the index needs more bits) give identical hierarchies.
#[test]
fn packed_and_wide_keys_agree() {
    let mut lcg = crate::hierarchy::test_lcg(99);
    let mut next = || (lcg() >> 40) as f32 / (1u64 << 24) as f32;
    for (ny, nx, levels) in [(40, 37, 0u32), (64, 64, 7), (1, 50, 0), (33, 1, 3)] {
        let m = Array2::from_shape_simple_fn((ny, nx), || {
            let v = next();
            // A few maps with many ties (values on a coarse grid) and missing pixels.
            if levels > 0 {
                if v < 0.05 {
                    f32::NAN
                } else {
                    (v * levels as f32).floor()
                }
            } else {
                v
            }
        });
        for conn in [Connectivity::Four, Connectivity::Eight] {
            for (floor, prom, area) in [(f64::NEG_INFINITY, 0.0, 1), (0.2, 0.1, 3), (0.0, 1.0, 2)] {
                let p = params(floor, prom, area, conn);
                let a = engine::build_impl(m.view(), &p, &|_| {}, &|| {}, usize::MAX).unwrap();
                let b = engine::build_impl(m.view(), &p, &|_| {}, &|| {}, 0).unwrap();
                assert_eq!(a.structures, b.structures, "{ny}x{nx} {conn:?} {floor}");
                assert_eq!(a.labels, b.labels);
                assert!(prom > 0.5 || !a.structures.is_empty());
            }
        }
    }
}

/// On a map large enough for hundreds of buckets of keys, the hierarchy is the same whether the
/// buckets are sorted by the sweeping thread alone (a pool of one thread) or partly by a second
/// thread ahead of the sweep, and whichever layout the keys have.
#[test]
fn buckets_sorted_beside_the_sweep_give_the_same_hierarchy() {
    let mut lcg = crate::hierarchy::test_lcg(5);
    let mut next = || (lcg() >> 40) as f32 / (1u64 << 24) as f32;
    // A smooth field (sums of a few waves) plus noise: many peaks, long merges.
    let (ny, nx) = (768, 704); // 256 buckets of keys
    let noise: Vec<f32> = (0..ny * nx).map(|_| next()).collect();
    let m = Array2::from_shape_fn((ny, nx), |(y, x)| {
        let (xf, yf) = (x as f32, y as f32);
        (xf * 0.05).sin() + (yf * 0.07).cos() + (0.03 * (xf + yf)).sin() + 0.3 * noise[y * nx + x]
    });
    let p = params(-0.5, 0.05, 3, Connectivity::Eight);
    // Each build also says once that a core is free: from the sorting thread when there is
    // one, else as the sweep starts.
    let in_pool = |threads: usize, pack_limit: usize| {
        let calls = std::sync::atomic::AtomicUsize::new(0);
        let count = || {
            calls.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        };
        let h = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| engine::build_impl(m.view(), &p, &|_| {}, &count, pack_limit).unwrap());
        assert_eq!(calls.into_inner(), 1, "{threads} threads");
        h
    };
    let one = in_pool(1, usize::MAX);
    assert!(one.leaves().len() > 20, "{} leaves", one.leaves().len());
    for (threads, pack_limit) in [(2, usize::MAX), (2, 0), (3, usize::MAX)] {
        let other = in_pool(threads, pack_limit);
        assert_eq!(
            one.structures, other.structures,
            "{threads} threads, limit {pack_limit}"
        );
        assert_eq!(one.labels, other.labels);
    }
}

/// Property test: on random small maps (some with many ties, some with missing pixels, some
/// a single column), the sweep in two parts and a replay (which runs on maps with wide keys
/// when the pool has two threads or more; forced here by the layout limit) gives exactly the
/// hierarchy of the sweep on one thread: every structure, sum and label. The maps reach
/// across the seam in every way: components that meet it early or late, merges on it, ties
/// along it.
mod two_part {
    use super::*;
    use proptest::prelude::*;

    fn map_strategy() -> impl Strategy<Value = Array2<f32>> {
        (1usize..14, 1usize..14, 0u32..4, any::<u64>()).prop_map(|(ny, nx, kind, seed)| {
            let mut lcg = crate::hierarchy::test_lcg(seed);
            Array2::from_shape_simple_fn((ny, nx), || {
                let v = (lcg() >> 40) as f32 / (1u64 << 24) as f32;
                match kind {
                    // Distinct values.
                    0 => v,
                    // Few levels: plateaus and ties everywhere.
                    1 => (v * 4.0).floor(),
                    // Missing pixels among ties.
                    2 if v < 0.1 => f32::NAN,
                    2 => (v * 9.0).floor(),
                    // A smooth slope plus noise: long merges across the seam.
                    _ => v * 0.3 + ((ny + nx) as f32).sin(),
                }
            })
        })
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 400, ..ProptestConfig::default() })]

        #[test]
        fn the_two_part_sweep_equals_the_whole_sweep(
            map in map_strategy(),
            floor in -0.5f64..2.0,
            prominence in prop_oneof![Just(0.0f64), 0.0f64..2.0],
            min_area in 1usize..5,
            eight in any::<bool>(),
        ) {
            let conn = if eight { Connectivity::Eight } else { Connectivity::Four };
            let p = params(floor, prominence, min_area, conn);
            let pool = |n: usize| rayon::ThreadPoolBuilder::new().num_threads(n).build().unwrap();
            let whole = pool(1).install(|| engine::build_impl(map.view(), &p, &|_| {}, &|| {}, usize::MAX));
            let parts = pool(2).install(|| engine::build_impl(map.view(), &p, &|_| {}, &|| {}, 0));
            match (whole, parts) {
                (Ok(a), Ok(b)) => {
                    prop_assert_eq!(a.structures, b.structures);
                    prop_assert_eq!(a.labels, b.labels);
                }
                (Err(a), Err(b)) => prop_assert_eq!(a, b),
                _ => prop_assert!(false, "one build failed and the other did not"),
            }
        }
    }
}

/// Every structure's sums, gathered row run by row run about its peak, against sums over its
/// pixels one by one about the same point (the definition): the count and the unweighted
/// position sums exactly (they are integers), the weighted ones to rounding; and the
/// centroid and covariance against those of sums about the origin.
#[test]
fn moments_of_every_structure_match_direct_sums() {
    let mut next = test_lcg(42);
    let (ny, nx) = (37, 53);
    let m = Array2::from_shape_fn((ny, nx), |(y, x)| {
        let bump = (-(((x as f32 - 20.0).powi(2) + (y as f32 - 15.0).powi(2)) / 60.0)).exp();
        5.0 * bump + (next() >> 40) as f32 / (1u64 << 24) as f32
    });
    for conn in [Connectivity::Four, Connectivity::Eight] {
        let h = build(m.view(), &params(0.3, 0.2, 2, conn)).unwrap();
        assert!(h.structures.len() > 5);
        assert!(h.structures.iter().any(|s| s.children.len() >= 2));
        for s in &h.structures {
            // The structure's pixels: those labelled with it or any descendant.
            let mut inside = vec![false; h.structures.len()];
            for t in &h.structures {
                let mut a = Some(t.id);
                while let Some(id) = a {
                    if id == s.id {
                        inside[t.id as usize] = true;
                        break;
                    }
                    a = h.structures[id as usize].parent;
                }
            }
            let got = s.sums;
            assert_eq!((got.x0, got.y0), (s.peak_x as f64, s.peak_y as f64));
            let mut want = Moments::about(got.x0, got.y0);
            let mut origin = Moments::default();
            let mut exact = [0i64; 5];
            for ((y, x), &l) in h.labels.indexed_iter() {
                if l >= 0 && inside[l as usize] {
                    let v = m[[y, x]] as f64;
                    want.add(x as f64, y as f64, v);
                    origin.add(x as f64, y as f64, v);
                    let dx = x as i64 - s.peak_x as i64;
                    let dy = y as i64 - s.peak_y as i64;
                    for (e, v) in exact.iter_mut().zip([dx, dy, dx * dx, dy * dy, dx * dy]) {
                        *e += v;
                    }
                }
            }
            assert_eq!(got.n, want.n);
            assert_eq!(
                [got.ux, got.uy, got.uxx, got.uyy, got.uxy],
                exact.map(|v| v as f64)
            );
            let close = |a: f64, b: f64, scale: f64| {
                assert!((a - b).abs() <= 1e-12 * scale, "{a} vs {b}");
            };
            // Sums about the peak: rounding against the largest term of each.
            let (v1, vx, vxx) = (
                want.sum.abs(),
                want.sum.abs() * 60.0,
                want.sum.abs() * 3600.0,
            );
            close(got.sum, want.sum, v1);
            close(got.sum2, want.sum2, want.sum2);
            close(got.sx, want.sx, vx);
            close(got.sy, want.sy, vx);
            close(got.sxx, want.sxx, vxx);
            close(got.syy, want.syy, vxx);
            close(got.sxy, want.sxy, vxx);
            // Positions and covariances from both, weighted and not.
            let both = |m: &Moments| {
                let (c, w) = (m.centroid(), m.weighted_centroid());
                let (v, u) = (m.covariance(), m.weighted_covariance());
                [c.0, c.1, w.0, w.1, v.0, v.1, v.2, u.0, u.1, u.2]
            };
            for (k, (g, o)) in both(&got).into_iter().zip(both(&origin)).enumerate() {
                close(g, o, if k < 4 { 60.0 } else { 3600.0 });
            }
        }
    }
}

/// A small structure far from the map's origin keeps the precision of its second moments:
/// its weighted covariance against the two-pass computation (the weighted mean first, then
/// the sums of squared offsets from it; the numerically stable method of common practice).
/// Sums about the origin would lose about ten of the sixteen digits here (x is about 3e5,
/// the variance about 1).
#[test]
fn second_moments_keep_their_precision_far_from_the_origin() {
    let (ny, nx) = (5, 300_000);
    let (cx, cy) = (299_990.3, 2.2);
    let m = Array2::from_shape_fn((ny, nx), |(y, x)| {
        let (dx, dy) = (x as f64 - cx, y as f64 - cy);
        (10.0 * (-(dx * dx / 3.0 + dy * dy / 1.5 + 0.4 * dx * dy) / 2.0).exp()) as f32
    });
    let h = build(m.view(), &params(0.5, 0.0, 1, Connectivity::Eight)).unwrap();
    assert_eq!(h.structures.len(), 1);
    let s = &h.structures[0];
    let pixels: Vec<(f64, f64, f64)> = h
        .labels
        .indexed_iter()
        .filter(|&(_, &l)| l == 0)
        .map(|((y, x), _)| (x as f64, y as f64, m[[y, x]] as f64))
        .collect();
    assert!(pixels.len() > 10);
    let w: f64 = pixels.iter().map(|p| p.2).sum();
    let mx = pixels.iter().map(|p| p.2 * p.0).sum::<f64>() / w;
    let my = pixels.iter().map(|p| p.2 * p.1).sum::<f64>() / w;
    let cov = |f: &dyn Fn(f64, f64) -> f64| {
        pixels
            .iter()
            .map(|p| p.2 * f(p.0 - mx, p.1 - my))
            .sum::<f64>()
            / w
    };
    let want = (cov(&|a, _| a * a), cov(&|a, b| a * b), cov(&|_, b| b * b));
    let got = s.sums.weighted_covariance();
    for (g, r) in [(got.0, want.0), (got.1, want.1), (got.2, want.2)] {
        assert!((g - r).abs() <= 1e-12 * want.0.max(want.2), "{g} vs {r}");
    }
    let (gx, gy) = s.sums.weighted_centroid();
    assert!((gx - mx).abs() <= 1e-9 && (gy - my).abs() <= 1e-12);
}

//! Property tests of the hierarchy engine on small random maps with missing pixels.

use cairn::hierarchy::{Connectivity, Hierarchy, HierarchyError, Params, build};
use ndarray::Array2;
use proptest::prelude::*;

/// A random map of up to 24 x 24 pixels, about one in twelve missing. With `levels` > 0 the
/// values are integers below `levels` (many ties and plateaus); otherwise they are random
/// numbers in [0, 1).
fn map_strategy(levels: u32) -> impl Strategy<Value = Array2<f32>> {
    (1usize..=24, 1usize..=24).prop_flat_map(move |(r, c)| {
        prop::collection::vec((any::<u32>(), 0u8..12), r * c).prop_map(move |v| {
            let vals = v
                .iter()
                .map(|&(x, miss)| {
                    if miss == 0 {
                        f32::NAN
                    } else if levels > 0 {
                        (x % levels) as f32
                    } else {
                        (x >> 8) as f32 / (1u32 << 24) as f32
                    }
                })
                .collect();
            Array2::from_shape_vec((r, c), vals).unwrap()
        })
    })
}

fn params_strategy(scale: f64) -> impl Strategy<Value = Params> {
    (
        0.0..0.6f64,
        prop_oneof![Just(0.0), 0.0..0.4f64],
        1usize..6,
        any::<bool>(),
    )
        .prop_map(move |(floor, prominence, min_area, eight)| Params {
            floor: floor * scale,
            prominence: prominence * scale,
            min_area,
            connectivity: if eight {
                Connectivity::Eight
            } else {
                Connectivity::Four
            },
        })
}

fn neighbours(
    (y, x): (usize, usize),
    (nr, nc): (usize, usize),
    conn: Connectivity,
) -> impl Iterator<Item = (usize, usize)> {
    conn.offsets().iter().filter_map(move |&(dy, dx)| {
        let (yy, xx) = (y as isize + dy, x as isize + dx);
        (yy >= 0 && xx >= 0 && (yy as usize) < nr && (xx as usize) < nc)
            .then_some((yy as usize, xx as usize))
    })
}

/// Connected components (ids from 0, -1 outside) of the pixels where `inside` holds.
fn components(
    dim: (usize, usize),
    conn: Connectivity,
    inside: impl Fn((usize, usize)) -> bool,
    same: impl Fn((usize, usize), (usize, usize)) -> bool,
) -> (Array2<i32>, usize) {
    let mut lab = Array2::from_elem(dim, -1);
    let mut n = 0;
    for start in ndarray::indices(dim) {
        if lab[start] >= 0 || !inside(start) {
            continue;
        }
        lab[start] = n as i32;
        let mut stack = vec![start];
        while let Some(p) = stack.pop() {
            for q in neighbours(p, dim, conn) {
                if lab[q] < 0 && inside(q) && same(p, q) {
                    lab[q] = n as i32;
                    stack.push(q);
                }
            }
        }
        n += 1;
    }
    (lab, n)
}

fn considered(map: &Array2<f32>, floor: f64, p: (usize, usize)) -> bool {
    !map[p].is_nan() && map[p] as f64 >= floor
}

/// Whether structure `a` is `b` or one of its descendants.
fn within(h: &Hierarchy, mut a: u32, b: u32) -> bool {
    loop {
        if a == b {
            return true;
        }
        match h.structures[a as usize].parent {
            Some(p) => a = p,
            None => return false,
        }
    }
}

/// Every rule the module documents, checked directly on the output.
fn check_invariants(map: &Array2<f32>, p: &Params, h: &Hierarchy) -> Result<(), TestCaseError> {
    let dim = map.dim();
    for s in &h.structures {
        // Thresholds: every structure (leaves in particular) meets them.
        let base = s.merge_level.unwrap_or(p.floor);
        prop_assert!(
            s.peak_value - base >= p.prominence,
            "structure {} too weak",
            s.id
        );
        prop_assert!(
            s.npix as usize >= p.min_area,
            "structure {} too small",
            s.id
        );
        if s.merge_level.is_some() {
            prop_assert!(s.peak_value > base);
        }
        // No single-child nodes; children listed both ways.
        prop_assert!(s.children.len() != 1, "structure {} has one child", s.id);
        for &c in &s.children {
            let ch = &h.structures[c as usize];
            prop_assert_eq!(ch.parent, Some(s.id));
            prop_assert_eq!(ch.depth, s.depth + 1);
            prop_assert!(ch.min_value >= ch.merge_level.unwrap());
            prop_assert_eq!(
                ch.merge_level,
                s.children
                    .first()
                    .map(|&f| { h.structures[f as usize].merge_level.unwrap() })
            );
        }
        // A child's pixels are inside its parent's: counts add up.
        let kids: u64 = s
            .children
            .iter()
            .map(|&c| h.structures[c as usize].npix)
            .sum();
        prop_assert_eq!(s.npix, s.npix_own + kids);
    }
    // Each considered pixel has exactly one smallest structure, or none when its whole
    // component of {map >= floor} was dropped; nothing else is labelled.
    let (comp, ncomp) = components(
        dim,
        p.connectivity,
        |q| considered(map, p.floor, q),
        |_, _| true,
    );
    let mut root_of_comp = vec![None; ncomp];
    for (q, &l) in h.labels.indexed_iter() {
        if l < 0 {
            continue;
        }
        prop_assert!(
            considered(map, p.floor, q),
            "pixel {:?} labelled but not considered",
            q
        );
        let mut r = l as u32;
        while let Some(pa) = h.structures[r as usize].parent {
            r = pa;
        }
        let c = comp[q] as usize;
        prop_assert!(
            root_of_comp[c].is_none_or(|x| x == r),
            "two roots in one component"
        );
        root_of_comp[c] = Some(r);
    }
    for (q, &l) in h.labels.indexed_iter() {
        if considered(map, p.floor, q) && l < 0 {
            prop_assert!(
                root_of_comp[comp[q] as usize].is_none(),
                "pixel {:?} left out",
                q
            );
        }
    }
    // Pixel sets: connected, with the peak inside and highest.
    for s in &h.structures {
        let inside = |q: (usize, usize)| h.labels[q] >= 0 && within(h, h.labels[q] as u32, s.id);
        let (_, n) = components(dim, p.connectivity, inside, |_, _| true);
        prop_assert_eq!(n, 1, "structure {} is not connected", s.id);
        prop_assert!(inside((s.peak_y, s.peak_x)));
        let mut count = 0u64;
        for (q, &v) in map.indexed_iter() {
            if inside(q) {
                count += 1;
                prop_assert!(v as f64 <= s.peak_value);
            }
        }
        prop_assert_eq!(count, s.npix);
    }
    Ok(())
}

/// A named symmetry: how it transforms a map, and where it sends (row, col) given the
/// original shape.
type Symmetry = (
    &'static str,
    fn(&Array2<f32>) -> Array2<f32>,
    fn((usize, usize), (usize, usize)) -> (usize, usize),
);

fn symmetries() -> Vec<Symmetry> {
    vec![
        ("transpose", |m| m.t().to_owned(), |(y, x), _| (x, y)),
        (
            "flip rows",
            |m| m.slice(ndarray::s![..;-1, ..]).to_owned(),
            |(y, x), (nr, _)| (nr - 1 - y, x),
        ),
        (
            "flip cols",
            |m| m.slice(ndarray::s![.., ..;-1]).to_owned(),
            |(y, x), (_, nc)| (y, nc - 1 - x),
        ),
        (
            "rotate 90",
            |m| m.t().slice(ndarray::s![.., ..;-1]).to_owned(),
            |(y, x), (nr, _)| (x, nr - 1 - y),
        ),
        (
            "rotate 180",
            |m| m.slice(ndarray::s![..;-1, ..;-1]).to_owned(),
            |(y, x), (nr, nc)| (nr - 1 - y, nc - 1 - x),
        ),
        (
            "rotate 270",
            |m| m.t().slice(ndarray::s![..;-1, ..]).to_owned(),
            |(y, x), (_, nc)| (nc - 1 - x, y),
        ),
    ]
}

/// The error `build` must return for these inputs, or `None` when it must succeed: the rules
/// of `HierarchyError` (src/hierarchy/mod.rs), in the order `build` checks them
/// (src/hierarchy/engine.rs). A map too large for 31-bit indices cannot occur here.
fn expected_error(map: &Array2<f32>, p: &Params) -> Option<HierarchyError> {
    let npix = map.len();
    if p.prominence.is_nan() || p.prominence < 0.0 {
        return Some(HierarchyError::BadProminence(p.prominence));
    }
    if p.floor.is_nan() {
        return Some(HierarchyError::BadFloor);
    }
    if p.min_area > npix {
        return Some(HierarchyError::MinAreaTooLarge {
            min_area: p.min_area,
            npix,
        });
    }
    let max = map.iter().filter(|v| !v.is_nan()).copied().reduce(f32::max);
    match max {
        None => Some(HierarchyError::NoValidPixels),
        Some(max) if p.floor > max as f64 => Some(HierarchyError::FloorAboveMaximum {
            floor: p.floor,
            max: max as f64,
        }),
        Some(_) => None,
    }
}

/// `build`, with its outcome checked against [`expected_error`]: an error must be exactly the
/// one the inputs call for, and a success must be expected. `None` when it (rightly) failed.
fn build_checked(map: &Array2<f32>, p: &Params) -> Result<Option<Hierarchy>, TestCaseError> {
    let expected = expected_error(map, p);
    match build(map.view(), p) {
        Ok(h) => {
            prop_assert!(
                expected.is_none(),
                "build succeeded where the inputs call for {:?}",
                expected
            );
            Ok(Some(h))
        }
        Err(e) => {
            prop_assert_eq!(Some(e), expected, "build's error");
            Ok(None)
        }
    }
}

fn distinct(map: &Array2<f32>) -> bool {
    let mut v: Vec<u32> = map
        .iter()
        .filter(|v| !v.is_nan())
        .map(|v| v.to_bits())
        .collect();
    let n = v.len();
    v.sort_unstable();
    v.dedup();
    v.len() == n
}

fn with_threads<T: Send>(n: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(n)
        .build()
        .unwrap()
        .install(f)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 200, ..ProptestConfig::default() })]

    #[test]
    fn invariants_hold_with_ties(map in map_strategy(6), p in params_strategy(6.0)) {
        if let Some(h) = build_checked(&map, &p)? {
            check_invariants(&map, &p, &h)?;
        }
    }

    #[test]
    fn invariants_hold_with_distinct_values(map in map_strategy(0), p in params_strategy(1.0)) {
        if let Some(h) = build_checked(&map, &p)? {
            check_invariants(&map, &p, &h)?;
        }
    }

    /// With prominence 0 and min-area 1 the leaves are the regional maxima (flat zones of
    /// considered pixels with no higher considered neighbour), found here by brute force.
    #[test]
    fn leaves_are_regional_maxima(map in map_strategy(5), floor in 0.0..3.0f64, eight in any::<bool>()) {
        let conn = if eight { Connectivity::Eight } else { Connectivity::Four };
        let p = Params { floor, prominence: 0.0, min_area: 1, connectivity: conn };
        let Some(h) = build_checked(&map, &p)? else { return Ok(()) };
        let dim = map.dim();
        let (zone, nz) = components(dim, conn, |q| considered(&map, floor, q), |a, b| map[a] == map[b]);
        let mut is_max = vec![true; nz];
        for (q, &z) in zone.indexed_iter() {
            if z >= 0 {
                for r in neighbours(q, dim, conn) {
                    if considered(&map, floor, r) && map[r] > map[q] {
                        is_max[z as usize] = false;
                    }
                }
            }
        }
        let mut hit = vec![false; nz];
        let leaves = h.leaves();
        for &l in &leaves {
            let s = &h.structures[l as usize];
            let z = zone[(s.peak_y, s.peak_x)] as usize;
            prop_assert!(is_max[z] && !hit[z], "leaf {} is not a distinct regional maximum", l);
            hit[z] = true;
        }
        prop_assert_eq!(leaves.len(), is_max.iter().filter(|&&m| m).count());
    }

    /// Rotations, flips and the transpose change nothing but positions when values are
    /// distinct (ids are ordered by peak value, so they even keep their numbers).
    #[test]
    fn symmetric_maps_give_the_same_tree(map in map_strategy(0), p in params_strategy(1.0)) {
        prop_assume!(distinct(&map));
        let Some(h) = build_checked(&map, &p)? else { return Ok(()) };
        let dim = map.dim();
        for (name, tmap, tpos) in symmetries() {
            let m2 = tmap(&map);
            let h2 = build(m2.view(), &p).unwrap();
            prop_assert_eq!(h.structures.len(), h2.structures.len(), "{}", name);
            for (a, b) in h.structures.iter().zip(&h2.structures) {
                prop_assert_eq!(a.peak_value, b.peak_value, "{}", name);
                prop_assert_eq!(tpos((a.peak_y, a.peak_x), dim), (b.peak_y, b.peak_x), "{}", name);
                prop_assert_eq!(a.parent, b.parent, "{}", name);
                prop_assert_eq!(&a.children, &b.children, "{}", name);
                prop_assert_eq!(a.merge_level, b.merge_level, "{}", name);
                prop_assert_eq!((a.npix, a.npix_own, a.depth), (b.npix, b.npix_own, b.depth), "{}", name);
                prop_assert_eq!(a.min_value, b.min_value, "{}", name);
                prop_assert!((a.sums.sum - b.sums.sum).abs() <= 1e-9 * a.sums.sum.abs().max(1.0));
            }
            for (q, &l) in h.labels.indexed_iter() {
                prop_assert_eq!(l, h2.labels[tpos(q, dim)], "{} label at {:?}", name, q);
            }
        }
    }

    /// One and two worker threads give bit-identical results.
    #[test]
    fn thread_count_changes_nothing(map in map_strategy(4), p in params_strategy(4.0)) {
        let one = with_threads(1, || build_checked(&map, &p))?;
        let two = with_threads(2, || build_checked(&map, &p))?;
        match (one, two) {
            (Some(a), Some(b)) => {
                prop_assert_eq!(a.structures, b.structures);
                prop_assert_eq!(a.labels, b.labels);
            }
            // Both failed, each with the error the inputs call for.
            (None, None) => {}
            _ => prop_assert!(false, "one run failed and the other did not"),
        }
    }
}

/// A larger smooth map, where the moment sums are split into several blocks: one and two
/// threads still agree bit for bit.
#[test]
fn thread_count_changes_nothing_on_a_larger_map() {
    let (nr, nc) = (300, 257);
    let map = Array2::from_shape_fn((nr, nc), |(y, x)| {
        let (y, x) = (y as f32 * 0.11, x as f32 * 0.07);
        y.sin() * (x * 1.3).cos() + (0.7 * x + 0.4 * y).sin() * 0.5 + (x * y * 0.01).cos() * 0.3
    });
    let p = Params {
        floor: -0.5,
        prominence: 0.05,
        min_area: 4,
        connectivity: Connectivity::Eight,
    };
    let a = with_threads(1, || build(map.view(), &p).unwrap());
    let b = with_threads(2, || build(map.view(), &p).unwrap());
    assert!(
        a.structures.len() > 10,
        "too few structures to test: {}",
        a.structures.len()
    );
    assert_eq!(a.structures, b.structures);
    assert_eq!(a.labels, b.labels);
}

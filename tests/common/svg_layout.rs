//! Reading the geometry of a written SVG figure back for layout checks: the boxes of text
//! (from the points of their glyph outlines, which hold the curves), the polylines of paths,
//! and the distance between a box and a polyline. Only the SVG is read, not cairn's own
//! placement code, so the checks see what a reader of the figure sees.
#![allow(dead_code)]

/// A box: left, top, right, bottom (y down).
pub type Bounds = (f64, f64, f64, f64);

/// A drawn line as its pieces (polylines).
pub type Pieces = Vec<Vec<(f64, f64)>>;

/// The numbers of a path's `d` attribute in pairs (x, y), per subpath (each `M` starts one).
/// The commands cairn writes are M, L, Q, C and Z, all absolute.
pub fn subpaths(d: &str) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut nums: Vec<f64> = Vec::new();
    let mut cur = String::new();
    let flush = |cur: &mut String, nums: &mut Vec<f64>| {
        if !cur.is_empty() {
            nums.push(cur.parse().unwrap());
            cur.clear();
        }
    };
    let push_pairs = |nums: &mut Vec<f64>, out: &mut Vec<Vec<(f64, f64)>>| {
        if let Some(last) = out.last_mut() {
            for p in nums.chunks(2) {
                last.push((p[0], p[1]));
            }
        }
        nums.clear();
    };
    for c in d.chars() {
        if c.is_ascii_alphabetic() && c != 'e' {
            flush(&mut cur, &mut nums);
            push_pairs(&mut nums, &mut out);
            if c == 'M' {
                out.push(Vec::new());
            }
        } else if c == ' ' || c == ',' {
            flush(&mut cur, &mut nums);
        } else if c == '-' && !cur.is_empty() && !cur.ends_with('e') {
            flush(&mut cur, &mut nums);
            cur.push(c);
        } else {
            cur.push(c);
        }
    }
    flush(&mut cur, &mut nums);
    push_pairs(&mut nums, &mut out);
    out
}

/// The box holding every point of a path.
pub fn bounds(d: &str) -> Bounds {
    subpaths(d).iter().flatten().fold(
        (
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        ),
        |b, &(x, y)| (b.0.min(x), b.1.min(y), b.2.max(x), b.3.max(y)),
    )
}

pub fn overlap(a: Bounds, b: Bounds) -> bool {
    a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3
}

fn point_box(p: (f64, f64), b: Bounds) -> f64 {
    let dx = (b.0 - p.0).max(p.0 - b.2).max(0.0);
    let dy = (b.1 - p.1).max(p.1 - b.3).max(0.0);
    dx.hypot(dy)
}

fn point_segment(p: (f64, f64), a: (f64, f64), b: (f64, f64)) -> f64 {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let len2 = dx * dx + dy * dy;
    let t = if len2 > 0.0 {
        (((p.0 - a.0) * dx + (p.1 - a.1) * dy) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    (a.0 + t * dx - p.0).hypot(a.1 + t * dy - p.1)
}

/// Whether the segment a-b meets the box: sampled finely (a hundredth of a pixel at most
/// between samples is far below the distances the checks ask for).
fn meets(a: (f64, f64), b: (f64, f64), bx: Bounds) -> bool {
    let n = (((b.0 - a.0).hypot(b.1 - a.1)) * 100.0).ceil().max(1.0) as usize;
    (0..=n).any(|k| {
        let t = k as f64 / n as f64;
        point_box((a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1)), bx) == 0.0
    })
}

/// The distance from a polyline (its subpaths) to a box, zero where it crosses the box.
pub fn distance(lines: &[Vec<(f64, f64)>], b: Bounds) -> f64 {
    let mut best = f64::INFINITY;
    for line in lines {
        for w in line.windows(2) {
            if meets(w[0], w[1], b) {
                return 0.0;
            }
            let corners = [(b.0, b.1), (b.2, b.1), (b.0, b.3), (b.2, b.3)];
            for c in corners {
                best = best.min(point_segment(c, w[0], w[1]));
            }
            best = best.min(point_box(w[0], b)).min(point_box(w[1], b));
        }
    }
    best
}

/// The polyline parts of `lines` that lie inside `frame` (the figure clips them there).
pub fn clipped(lines: &[Vec<(f64, f64)>], frame: Bounds) -> Vec<Vec<(f64, f64)>> {
    let mut out = Vec::new();
    for line in lines {
        // Fine samples inside the frame, split where the line leaves it.
        let mut cur: Vec<(f64, f64)> = Vec::new();
        for w in line.windows(2) {
            let n = ((w[1].0 - w[0].0).hypot(w[1].1 - w[0].1)).ceil().max(1.0) as usize;
            for k in 0..=n {
                let t = k as f64 / n as f64;
                let p = (
                    w[0].0 + t * (w[1].0 - w[0].0),
                    w[0].1 + t * (w[1].1 - w[0].1),
                );
                if point_box(p, frame) == 0.0 {
                    cur.push(p);
                } else if !cur.is_empty() {
                    out.push(std::mem::take(&mut cur));
                }
            }
        }
        if !cur.is_empty() {
            out.push(cur);
        }
    }
    out
}

/// A plot's frame, its guides (label and drawn polyline, clipped to the frame) and the boxes of
/// the guides' labels, read from the SVG of `cairn::render::plot`.
pub struct GuideLayout {
    pub frame: Bounds,
    pub guides: Vec<(String, Pieces)>,
    pub labels: Vec<(String, Bounds)>,
}

pub fn guide_layout(svg: &str) -> GuideLayout {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let class_has = |n: &roxmltree::Node, c: &str| {
        n.attribute("class")
            .is_some_and(|x| x.split(' ').any(|x| x == c))
    };
    let frame_path = doc
        .descendants()
        .find(|n| n.has_tag_name("path") && class_has(n, "frame"))
        .expect("a frame");
    let first = &subpaths(frame_path.attribute("d").unwrap())[0];
    let frame = first.iter().fold(
        (
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        ),
        |b, &(x, y)| (b.0.min(x), b.1.min(y), b.2.max(x), b.3.max(y)),
    );
    let guides = doc
        .descendants()
        .filter(|n| n.has_tag_name("path") && class_has(n, "guide"))
        .map(|n| {
            (
                n.attribute("aria-label").unwrap().to_string(),
                clipped(&subpaths(n.attribute("d").unwrap()), frame),
            )
        })
        .collect();
    // The labels' glyphs (their fill; the white halo around them is not counted).
    let labels = doc
        .descendants()
        .filter(|n| n.has_tag_name("path") && class_has(n, "text"))
        .filter(|n| n.attribute("fill") != Some("none"))
        .filter(|n| {
            n.ancestors()
                .any(|a| a.has_tag_name("g") && a.attribute("id") == Some("guide-labels"))
        })
        .map(|n| {
            (
                n.attribute("aria-label").unwrap().to_string(),
                bounds(n.attribute("d").unwrap()),
            )
        })
        .collect();
    GuideLayout {
        frame,
        guides,
        labels,
    }
}

/// Checks that every guide has one label, inside the frame by `margin` pixels, overlapping no
/// other label, crossed by no guide, and nearest its own guide: at least `clear` pixels nearer
/// than any other, and no farther from it than `near` pixels.
pub fn check_guide_labels(svg: &str, margin: f64, clear: f64, near: f64) {
    let l = guide_layout(svg);
    assert_eq!(l.labels.len(), l.guides.len(), "one label per guide");
    for (i, (name, b)) in l.labels.iter().enumerate() {
        assert!(
            b.0 >= l.frame.0 + margin
                && b.1 >= l.frame.1 + margin
                && b.2 <= l.frame.2 - margin
                && b.3 <= l.frame.3 - margin,
            "label {name} at {b:?} is not inside the frame {:?}",
            l.frame
        );
        for (other, c) in &l.labels[i + 1..] {
            assert!(!overlap(*b, *c), "labels {name} and {other} overlap");
        }
        let own = l
            .guides
            .iter()
            .find(|(g, _)| g == name)
            .map(|(_, lines)| distance(lines, *b))
            .unwrap_or_else(|| panic!("no guide for label {name}"));
        assert!(own > 0.0, "label {name} is crossed by its own guide");
        assert!(own <= near, "label {name} lies {own} px from its guide");
        for (g, lines) in &l.guides {
            if g != name {
                let d = distance(lines, *b);
                assert!(
                    d >= own + clear,
                    "label {name} lies {own:.1} px from its guide and {d:.1} px from {g}"
                );
            }
        }
    }
}

/// Whether `p` lies inside closed rings (even-odd rule: a hole is outside).
pub fn inside(rings: &[Vec<(f64, f64)>], p: (f64, f64)) -> bool {
    let mut inside = false;
    for r in rings {
        for k in 0..r.len() {
            let (a, b) = (r[k], r[(k + 1) % r.len()]);
            if (a.1 > p.1) != (b.1 > p.1) && p.0 < a.0 + (p.1 - a.1) / (b.1 - a.1) * (b.0 - a.0) {
                inside = !inside;
            }
        }
    }
    inside
}

/// The rings of a path as closed polylines (the first point repeated at the end).
fn closed(d: &str) -> Vec<Vec<(f64, f64)>> {
    subpaths(d)
        .into_iter()
        .filter(|r| !r.is_empty())
        .map(|mut r| {
            r.push(r[0]);
            r
        })
        .collect()
}

/// A straight line: its two ends.
pub type Segment = ((f64, f64), (f64, f64));

/// A map figure's leaves as drawn, read from the SVG of `cairn::render`: the frame, each
/// leaf's rings (by id, `leaf-ID`), each leaf label's glyph box (`label-ID`) and each leader
/// line (`leader-ID`: its two ends).
pub struct LeafLayout {
    pub frame: Bounds,
    pub outlines: std::collections::BTreeMap<i32, Vec<Vec<(f64, f64)>>>,
    pub labels: std::collections::BTreeMap<i32, Bounds>,
    pub leaders: std::collections::BTreeMap<i32, Segment>,
}

pub fn leaf_layout(svg: &str) -> LeafLayout {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let first_class = |n: &roxmltree::Node| {
        n.attribute("class")
            .and_then(|c| c.split(' ').next())
            .unwrap_or("")
            .to_string()
    };
    let id_of = |n: &roxmltree::Node, prefix: &str| -> i32 {
        n.attribute("id")
            .and_then(|i| i.strip_prefix(prefix))
            .unwrap_or_else(|| panic!("no id {prefix}N on {:?}", n.attribute("id")))
            .parse()
            .unwrap()
    };
    let paths: Vec<roxmltree::Node> = doc
        .descendants()
        .filter(|n| n.has_tag_name("path"))
        .collect();
    let frame = bounds(
        paths
            .iter()
            .find(|n| first_class(n) == "frame")
            .expect("a frame")
            .attribute("d")
            .unwrap(),
    );
    let mut l = LeafLayout {
        frame,
        outlines: Default::default(),
        labels: Default::default(),
        leaders: Default::default(),
    };
    for n in &paths {
        let d = n.attribute("d").unwrap();
        match first_class(n).as_str() {
            "leaf" => {
                l.outlines.insert(id_of(n, "leaf-"), closed(d));
            }
            "leaf-label" => {
                l.labels.insert(id_of(n, "label-"), bounds(d));
            }
            "leaf-leader" => {
                let s = subpaths(d);
                assert!(
                    s.len() == 1 && s[0].len() == 2,
                    "a leader is one straight segment: {d}"
                );
                l.leaders.insert(id_of(n, "leader-"), (s[0][0], s[0][1]));
            }
            _ => {}
        }
    }
    l
}

/// Checks the rule of leaf labels on a map figure's SVG: a label without a leader line is
/// nearer its own leaf (its outline as drawn, or inside it) than any other leaf's outline, and
/// crosses no other; a leader line starts on its own leaf's outline (within `on` pixels), its
/// start farther from every other leaf's outline than that, and ends beside its own label; no
/// two labels overlap. Returns the numbers of labels and of leader lines.
pub fn check_leaf_labels(svg: &str, on: f64) -> (usize, usize) {
    let l = leaf_layout(svg);
    let frame_of = |id: i32| clipped(&l.outlines[&id], l.frame);
    let outlines: std::collections::BTreeMap<i32, Pieces> =
        l.outlines.keys().map(|&id| (id, frame_of(id))).collect();
    let labels: Vec<(i32, Bounds)> = l.labels.iter().map(|(&k, &b)| (k, b)).collect();
    for (i, &(id, b)) in labels.iter().enumerate() {
        for &(other, c) in &labels[i + 1..] {
            assert!(!overlap(b, c), "labels {id} and {other} overlap");
        }
        let own_rings = l
            .outlines
            .get(&id)
            .unwrap_or_else(|| panic!("label {id} has no leaf outline"));
        let centre = (0.5 * (b.0 + b.2), 0.5 * (b.1 + b.3));
        let own = if inside(own_rings, centre) {
            0.0
        } else {
            distance(&outlines[&id], b)
        };
        let nearest_other = outlines
            .iter()
            .filter(|(k, _)| **k != id)
            .map(|(k, lines)| {
                let d = if inside(&l.outlines[k], centre) {
                    0.0
                } else {
                    distance(lines, b)
                };
                (d, *k)
            })
            .fold((f64::INFINITY, -1), |a, x| if x.0 < a.0 { x } else { a });
        assert!(
            nearest_other.0 > 0.0,
            "label {id} at {b:?} touches leaf {}",
            nearest_other.1
        );
        match l.leaders.get(&id) {
            None => assert!(
                own < nearest_other.0,
                "label {id} at {b:?} lies {own:.1} px from its leaf and {:.1} px from leaf {}",
                nearest_other.0,
                nearest_other.1
            ),
            Some(&(start, end)) => {
                let at = (start.0, start.1, start.0, start.1);
                let d_own = distance(&l.outlines[&id], at);
                assert!(
                    d_own <= on,
                    "leader of {id} starts {d_own:.2} px from its leaf"
                );
                for (k, rings) in &l.outlines {
                    if *k != id {
                        let d = distance(rings, at);
                        assert!(
                            d > on && !inside(rings, start),
                            "leader of {id} starts {d:.2} px from leaf {k}"
                        );
                    }
                }
                let to_label = distance(&[vec![end, end]], b);
                assert!(
                    to_label <= 0.5 * (b.3 - b.1),
                    "leader of {id} ends {to_label:.1} px from its label"
                );
            }
        }
    }
    for id in l.leaders.keys() {
        assert!(l.labels.contains_key(id), "leader {id} without a label");
    }
    (l.labels.len(), l.leaders.len())
}

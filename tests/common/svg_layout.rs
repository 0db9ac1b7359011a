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

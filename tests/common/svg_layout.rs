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

/// An affine map of the page as SVG writes it, `matrix(a b c d e f)`: a point (x, y) goes to
/// (a x + c y + e, b x + d y + f).
pub type Affine = [f64; 6];

pub const IDENTITY: Affine = [1.0, 0.0, 0.0, 1.0, 0.0, 0.0];

fn compose(m: &Affine, n: &Affine) -> Affine {
    [
        m[0] * n[0] + m[2] * n[1],
        m[1] * n[0] + m[3] * n[1],
        m[0] * n[2] + m[2] * n[3],
        m[1] * n[2] + m[3] * n[3],
        m[0] * n[4] + m[2] * n[5] + m[4],
        m[1] * n[4] + m[3] * n[5] + m[5],
    ]
}

pub fn apply(m: &Affine, p: (f64, f64)) -> (f64, f64) {
    (
        m[0] * p.0 + m[2] * p.1 + m[4],
        m[1] * p.0 + m[3] * p.1 + m[5],
    )
}

/// An SVG `transform` attribute as one map (SVG 1.1, section 7.6: the list's first item is
/// the outermost): `translate`, `rotate` (degrees, clockwise on the page, optionally about a
/// point), `scale` and `matrix`.
pub fn transform(attr: &str) -> Affine {
    let mut m = IDENTITY;
    for item in attr.split(')').map(str::trim).filter(|t| !t.is_empty()) {
        let (name, args) = item.split_once('(').expect("a transform is name(numbers)");
        let v: Vec<f64> = args
            .split([' ', ','])
            .filter(|t| !t.is_empty())
            .map(|t| t.parse().unwrap())
            .collect();
        let n = match (name.trim(), v.as_slice()) {
            ("translate", [x]) => [1.0, 0.0, 0.0, 1.0, *x, 0.0],
            ("translate", [x, y]) => [1.0, 0.0, 0.0, 1.0, *x, *y],
            ("rotate", [a, rest @ ..]) => {
                let (s, c) = a.to_radians().sin_cos();
                let r = [c, s, -s, c, 0.0, 0.0];
                match rest {
                    [] => r,
                    [x, y] => compose(
                        &compose(&[1.0, 0.0, 0.0, 1.0, *x, *y], &r),
                        &[1.0, 0.0, 0.0, 1.0, -x, -y],
                    ),
                    _ => panic!("rotate takes one or three numbers: {attr}"),
                }
            }
            ("scale", [k]) => [*k, 0.0, 0.0, *k, 0.0, 0.0],
            ("scale", [kx, ky]) => [*kx, 0.0, 0.0, *ky, 0.0, 0.0],
            ("matrix", [a, b, c, d, e, f]) => [*a, *b, *c, *d, *e, *f],
            _ => panic!("unread transform {item:?} in {attr}"),
        };
        m = compose(&m, &n);
    }
    m
}

/// A guide's label as drawn: its text, the box of its glyph outlines in the frame they are
/// written in (the path's own coordinates), and the map from that frame to the page (the
/// path's `transform`, none for level text). Without scaling (cairn writes none), the map
/// turns and moves the box, so distances in the label's frame are distances on the page.
pub struct GuideLabel {
    pub name: String,
    pub own_box: Bounds,
    pub to_page: Affine,
}

impl GuideLabel {
    /// The box's corners on the page, in order round it.
    pub fn corners(&self) -> [(f64, f64); 4] {
        let b = self.own_box;
        [(b.0, b.1), (b.2, b.1), (b.2, b.3), (b.0, b.3)].map(|p| apply(&self.to_page, p))
    }
    /// The centre of the box on the page.
    pub fn centre(&self) -> (f64, f64) {
        let b = self.own_box;
        apply(&self.to_page, (0.5 * (b.0 + b.2), 0.5 * (b.1 + b.3)))
    }
    /// The unit vector of the baseline (the reading direction) on the page.
    pub fn direction(&self) -> (f64, f64) {
        let (a, b) = (self.to_page[0], self.to_page[1]);
        let n = a.hypot(b);
        (a / n, b / n)
    }
    /// A point of the page in the label's frame: along the baseline from the box's centre,
    /// and across it (downwards for level text).
    pub fn own(&self, p: (f64, f64)) -> (f64, f64) {
        let c = self.centre();
        let (ux, uy) = self.direction();
        let (dx, dy) = (p.0 - c.0, p.1 - c.1);
        (dx * ux + dy * uy, dy * ux - dx * uy)
    }
    /// The box in the label's frame, centred on the origin.
    pub fn centred_box(&self) -> Bounds {
        let b = self.own_box;
        let (hw, hh) = (0.5 * (b.2 - b.0), 0.5 * (b.3 - b.1));
        (-hw, -hh, hw, hh)
    }
}

/// Whether two convex polygons overlap: no side of either separates them.
pub fn polygons_overlap(a: &[(f64, f64)], b: &[(f64, f64)]) -> bool {
    let separates = |poly: &[(f64, f64)]| {
        (0..poly.len()).any(|k| {
            let (p, q) = (poly[k], poly[(k + 1) % poly.len()]);
            let n = (q.1 - p.1, p.0 - q.0);
            let span = |pts: &[(f64, f64)]| {
                pts.iter()
                    .map(|r| r.0 * n.0 + r.1 * n.1)
                    .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                        (lo.min(v), hi.max(v))
                    })
            };
            let (a0, a1) = span(a);
            let (b0, b1) = span(b);
            a1 <= b0 || b1 <= a0
        })
    };
    !separates(a) && !separates(b)
}

/// A plot's frame, its guides (label and drawn polyline, clipped to the frame) and the
/// guides' labels, read from the SVG of `cairn::render::plot`.
pub struct GuideLayout {
    pub frame: Bounds,
    pub guides: Vec<(String, Pieces)>,
    pub labels: Vec<GuideLabel>,
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
    // The labels' glyphs (their fill; the white halo around them is not counted), with the
    // transforms of the path and of every group holding it.
    let labels = doc
        .descendants()
        .filter(|n| n.has_tag_name("path") && class_has(n, "text"))
        .filter(|n| n.attribute("fill") != Some("none"))
        .filter(|n| {
            n.ancestors()
                .any(|a| a.has_tag_name("g") && a.attribute("id") == Some("guide-labels"))
        })
        .map(|n| {
            let to_page = n
                .ancestors()
                .filter_map(|a| a.attribute("transform"))
                .fold(IDENTITY, |inner, t| compose(&transform(t), &inner));
            GuideLabel {
                name: n.attribute("aria-label").unwrap().to_string(),
                own_box: bounds(n.attribute("d").unwrap()),
                to_page,
            }
        })
        .collect();
    GuideLayout {
        frame,
        guides,
        labels,
    }
}

/// What the checks of guide labels ask, in pixels and degrees.
#[derive(Debug, Clone, Copy)]
pub struct LabelRules {
    /// The labels' text size (pixels per em): the reach of a label's line checked beyond its
    /// ends.
    pub lfs: f64,
    /// How far inside the frame every label stays.
    pub margin: f64,
    /// How near another guide may come to a label.
    pub clear: f64,
    /// How far a label written along its line may lie off it (its centre), and its baseline's
    /// largest angle to it.
    pub on: f64,
    pub degrees: f64,
    /// A level label beside its line (where no place along it is clear): at most `near` from
    /// its own line, and every other line at least `beside` farther.
    pub near: f64,
    pub beside: f64,
}

/// How a label was found placed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Placed {
    /// Written along its own line, at this angle on the page (degrees, counter-clockwise).
    Along(f64),
    /// Level, beside its line.
    Level,
}

/// A straight line fitted in a label's frame, v = offset + slope u: offset, slope and the
/// points fitted.
type LineFit = (f64, f64, Vec<(f64, f64)>);

/// The own line of a label in the label's frame, fitted near its ends: the points of the
/// line within a letter of the label's ends and band, and the fit v = offset + slope u.
fn line_through(lab: &GuideLabel, own: &Pieces, lfs: f64) -> Option<LineFit> {
    let b = lab.centred_box();
    let near: Vec<(f64, f64)> = own
        .iter()
        .flatten()
        .map(|&q| lab.own(q))
        .filter(|&(u, v)| u.abs() <= b.2 + lfs && v.abs() <= b.3 + lfs)
        .collect();
    if near.len() < 3 || !near.iter().any(|q| q.0.abs() > b.2) {
        return None;
    }
    let n = near.len() as f64;
    let (mu, mv) = near
        .iter()
        .fold((0.0, 0.0), |(a, c), q| (a + q.0 / n, c + q.1 / n));
    let (suv, suu) = near.iter().fold((0.0, 0.0), |(a, c), q| {
        (a + (q.0 - mu) * (q.1 - mv), c + (q.0 - mu) * (q.0 - mu))
    });
    if suu <= 0.0 {
        return None;
    }
    let slope = suv / suu;
    Some((mv - slope * mu, slope, near))
}

/// Whether some place along a drawn line (its pieces, every pixel) holds a box of half sizes
/// `hw` and `hh` centred on the line and turned along it (the chord of the line under it),
/// at least `margin` inside the frame and at least `clear` from every one of `others`.
fn place_along_exists(
    own: &Pieces,
    others: &[&Pieces],
    frame: Bounds,
    hw: f64,
    hh: f64,
    margin: f64,
    clear: f64,
) -> bool {
    for piece in own {
        let mut cum = vec![0.0];
        for w in piece.windows(2) {
            let last = cum[cum.len() - 1];
            cum.push(last + (w[1].0 - w[0].0).hypot(w[1].1 - w[0].1));
        }
        let total = cum[cum.len() - 1];
        let at = |s: f64| {
            let j = cum.partition_point(|&c| c <= s).clamp(1, piece.len() - 1);
            let len = cum[j] - cum[j - 1];
            let t = if len > 0.0 {
                (s - cum[j - 1]) / len
            } else {
                0.0
            };
            let (a, b) = (piece[j - 1], piece[j]);
            (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1))
        };
        let mut s = hw;
        while s + hw <= total {
            let (c, a, b) = (at(s), at(s - hw), at(s + hw));
            let len = (b.0 - a.0).hypot(b.1 - a.1);
            s += 1.0;
            if len <= 0.0 {
                continue;
            }
            let u = ((b.0 - a.0) / len, (b.1 - a.1) / len);
            let own = |p: (f64, f64)| {
                let (dx, dy) = (p.0 - c.0, p.1 - c.1);
                (dx * u.0 + dy * u.1, dy * u.0 - dx * u.1)
            };
            let inside = [(-1.0, -1.0), (1.0, -1.0), (1.0, 1.0), (-1.0, 1.0)]
                .iter()
                .map(|&(i, j)| {
                    (
                        c.0 + i * hw * u.0 - j * hh * u.1,
                        c.1 + i * hw * u.1 + j * hh * u.0,
                    )
                })
                .all(|p| {
                    p.0 >= frame.0 + margin
                        && p.0 <= frame.2 - margin
                        && p.1 >= frame.1 + margin
                        && p.1 <= frame.3 - margin
                });
            let apart = others.iter().all(|pieces| {
                let turned: Pieces = pieces
                    .iter()
                    .map(|p| p.iter().map(|&q| own(q)).collect())
                    .collect();
                distance(&turned, (-hw, -hh, hw, hh)) >= clear
            });
            if inside && apart {
                return true;
            }
        }
    }
    false
}

/// Checks every guide's label as read from the SVG, and says how each is placed.
///
/// Every label: one per guide, inside the frame by `margin`, overlapping no other label.
///
/// Written along its own line (the rule): reading left to right (upwards on a vertical
/// line); its own line cut under it (the drawn line stays off the box of the glyphs) and
/// running through it: the line's points within a letter (`lfs`) of the label's ends lie on
/// one straight line at most `on` from the label's centre and at most `degrees` from its
/// baseline; every other guide at least `clear` from the label's turned box.
///
/// Level beside its line (the fallback): only where no place along the line is clear (no
/// box of the label's size, centred on and turned along its line, lies `margin` inside the
/// frame and `clear` from every other guide, with a pixel to spare on both), not crossed by
/// its own line or any other, its own line at most `near` away and every other line at least
/// `beside` farther than its own.
pub fn check_guide_labels(svg: &str, rules: LabelRules) -> Vec<(String, Placed)> {
    let LabelRules {
        lfs,
        margin,
        clear,
        on,
        degrees,
        near,
        beside,
    } = rules;
    let l = guide_layout(svg);
    assert_eq!(l.labels.len(), l.guides.len(), "one label per guide");
    let mut placed = Vec::new();
    for (i, lab) in l.labels.iter().enumerate() {
        let name = &lab.name;
        let corners = lab.corners();
        for c in corners {
            assert!(
                c.0 >= l.frame.0 + margin
                    && c.1 >= l.frame.1 + margin
                    && c.0 <= l.frame.2 - margin
                    && c.1 <= l.frame.3 - margin,
                "label {name} reaches {c:?}, outside the frame {:?} by {margin}",
                l.frame
            );
        }
        for other in &l.labels[i + 1..] {
            assert!(
                !polygons_overlap(&corners, &other.corners()),
                "labels {name} and {} overlap",
                other.name
            );
        }
        let b = lab.centred_box();
        // A drawn line in the label's own frame.
        let own_frame = |pieces: &Pieces| -> Pieces {
            pieces
                .iter()
                .map(|p| p.iter().map(|&q| lab.own(q)).collect())
                .collect()
        };
        let own_line = &l
            .guides
            .iter()
            .find(|(g, _)| g == name)
            .unwrap_or_else(|| panic!("no guide for label {name}"))
            .1;
        let others: Vec<(&String, &Pieces)> = l
            .guides
            .iter()
            .filter(|(g, _)| g != name)
            .map(|(g, p)| (g, p))
            .collect();
        let own = distance(&own_frame(own_line), b);
        assert!(own > 0.0, "label {name} is drawn over its own line");
        let (ux, uy) = lab.direction();
        let fit = line_through(lab, own_line, lfs);
        // A turned label is written along its line; a level one is when its line runs level
        // through it.
        let turned = (ux - 1.0).abs() > 1e-9;
        let along = turned
            || fit.as_ref().is_some_and(|(offset, slope, _)| {
                offset.abs() < b.3 && slope.atan().to_degrees().abs() <= degrees
            });
        if along {
            let (offset, slope, pts) = fit.unwrap_or_else(|| {
                panic!("label {name} is turned, but its own line does not run through it")
            });
            assert!(
                ux > 1e-9 || (ux.abs() <= 1e-9 && uy < 0.0),
                "label {name} reads right to left or downwards: {:?}",
                (ux, uy)
            );
            assert!(
                offset.abs() <= on,
                "label {name}: its centre lies {offset:.2} px off its own line"
            );
            let tilt = slope.atan().to_degrees();
            assert!(
                tilt.abs() <= degrees,
                "label {name}: its baseline is {tilt:.2} degrees off its own line"
            );
            for &(u, v) in &pts {
                assert!(
                    (v - offset - slope * u).abs() <= on,
                    "label {name}: its own line bends by the label"
                );
            }
            for (g, pieces) in &others {
                let d = distance(&own_frame(pieces), b);
                assert!(d >= clear, "label {name} lies {d:.1} px from the guide {g}");
            }
            placed.push((name.clone(), Placed::Along((-uy).atan2(ux).to_degrees())));
        } else {
            let others_only: Vec<&Pieces> = others.iter().map(|(_, p)| *p).collect();
            assert!(
                !place_along_exists(
                    own_line,
                    &others_only,
                    l.frame,
                    b.2,
                    b.3,
                    margin + 1.0,
                    clear + 1.0
                ),
                "label {name} stands level though a place along its line is clear"
            );
            assert!(own <= near, "label {name} lies {own:.1} px from its guide");
            for (g, pieces) in &others {
                let d = distance(pieces, lab_bounds(lab));
                assert!(
                    d >= own + beside,
                    "label {name} lies {own:.1} px from its guide and {d:.1} px from {g}"
                );
            }
            placed.push((name.clone(), Placed::Level));
        }
    }
    placed
}

/// The page box of a level label.
fn lab_bounds(lab: &GuideLabel) -> Bounds {
    let c = lab.corners();
    c.iter().fold(
        (
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        ),
        |b, &(x, y)| (b.0.min(x), b.1.min(y), b.2.max(x), b.3.max(y)),
    )
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

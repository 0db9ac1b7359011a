//! Checks of the x-y plots on invented data (power-law mass samples, a made-up mass-size
//! relation): well-formed SVG with one group per series and the guides, decodable PNG of the
//! requested width, round ticks placed linearly (or log-linearly) in value, points that
//! cannot be shown on log axes skipped without error, identical bytes on a second render.
//!
//! With `CAIRN_PLOT_DIR` set, the figures are also written there to be looked at.

use cairn::render::plot::{
    AxisScale, Guide, Plot, PlotTick, Series, plot_axes, plot_pdf, plot_png, plot_svg, scale_ticks,
};

/// A small deterministic generator of uniform numbers in (0, 1).
struct Uniform(u64);

impl Uniform {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
}

/// Masses drawn from dN/dM ∝ M^-alpha above `m_min`.
fn power_law_masses(n: usize, alpha: f64, m_min: f64, seed: u64) -> Vec<f64> {
    let mut u = Uniform(seed);
    (0..n)
        .map(|_| m_min * (1.0 - u.next()).powf(-1.0 / (alpha - 1.0)))
        .collect()
}

/// A differential mass function dN/dlog10 M in bins of 0.2 dex: bin centres and values, with
/// Poisson error bars; empty bins have value zero.
fn mass_function(m: &[f64]) -> Series {
    let w = 0.2;
    let lo = -1.0;
    let nb = 20;
    let mut counts = vec![0usize; nb];
    for &v in m {
        let k = ((v.log10() - lo) / w).floor();
        if k >= 0.0 && (k as usize) < nb {
            counts[k as usize] += 1;
        }
    }
    let mut pts = Vec::new();
    let mut errs = Vec::new();
    for (k, &c) in counts.iter().enumerate() {
        let x = 10f64.powf(lo + (k as f64 + 0.5) * w);
        let y = c as f64 / w;
        pts.push((x, y));
        let s = (c as f64).sqrt() / w;
        errs.push((y - s, y + s));
    }
    Series {
        points: pts,
        y_errors: Some(errs),
        steps: true,
        ..Default::default()
    }
}

fn mass_function_plot() -> Plot {
    let a = power_law_masses(400, 2.3, 0.5, 7);
    let b = power_law_masses(150, 1.8, 0.3, 11);
    let mut sa = mass_function(&a);
    sa.label = "cloud A (400 cores)".into();
    sa.style = 0;
    sa.line = Some(
        (0..=10)
            .map(|i| {
                let m = 0.7 * 10f64.powf(i as f64 * 0.2);
                (
                    m,
                    std::f64::consts::LN_10 * 400.0 * 1.3 * (m / 0.5).powf(-1.3),
                )
            })
            .collect(),
    );
    let mut sb = mass_function(&b);
    sb.label = "cloud B (150 cores)".into();
    sb.style = 2;
    Plot {
        title: None,
        x_label: "M [M_{sun}]".into(),
        y_label: "dN/dlog_{10}M".into(),
        x_scale: AxisScale::Log10,
        y_scale: AxisScale::Log10,
        series: vec![sa, sb],
        notes: vec![
            "A: slope \u{2212}1.30 ± 0.06".into(),
            "B: slope \u{2212}0.80 ± 0.09".into(),
        ],
        ..Default::default()
    }
}

fn mass_size_plot() -> Plot {
    let mut u = Uniform(99);
    let mut series = Vec::new();
    for (k, (name, n, norm)) in [
        ("cloud A", 40, 150.0),
        ("cloud B", 25, 40.0),
        ("cloud C", 12, 600.0),
    ]
    .into_iter()
    .enumerate()
    {
        let mut pts = Vec::new();
        let mut ye = Vec::new();
        let mut xe = Vec::new();
        for _ in 0..n {
            let r = 0.02 * 10f64.powf(1.2 * u.next());
            let m = norm * r.powf(1.9) * 10f64.powf(0.4 * (u.next() - 0.5)) * 10.0;
            pts.push((r, m));
            ye.push((m * 0.7, m * 1.4));
            xe.push((r * 0.9, r * 1.1));
        }
        series.push(Series {
            label: name.into(),
            style: k,
            points: pts,
            y_errors: Some(ye),
            x_errors: Some(xe),
            ..Default::default()
        });
    }
    let guide = |label: &str, f: &dyn Fn(f64) -> f64| Guide {
        label: label.into(),
        points: (0..=40)
            .map(|i| {
                let r = 1e-3 * 10f64.powf(i as f64 * 0.1);
                (r, f(r))
            })
            .collect(),
    };
    Plot {
        title: Some("Mass against size".into()),
        x_label: "R_{eff} [pc]".into(),
        y_label: "M [M_{sun}]".into(),
        x_scale: AxisScale::Log10,
        y_scale: AxisScale::Log10,
        series,
        guides: vec![
            guide("N(H_{2}) = 10^{22} cm^{-2}", &|r| 2.2e3 * r * r * 2.0),
            guide("N(H_{2}) = 10^{23} cm^{-2}", &|r| 2.2e4 * r * r * 2.0),
            guide("M_{BE}, 10 K", &|r| 20.0 * r / 0.1),
        ],
        ..Default::default()
    }
}

fn linear_plot() -> Plot {
    let mut u = Uniform(5);
    let pts: Vec<(f64, f64)> = (0..30)
        .map(|i| {
            let x = -2.0 + i as f64 * 0.2;
            (x, 0.8 * x + 0.5 + 0.6 * (u.next() - 0.5))
        })
        .collect();
    let ye = pts.iter().map(|&(_, y)| (y - 0.3, y + 0.3)).collect();
    Plot {
        x_label: "log_{10}(n / cm^{-3}) \u{2212} 4".into(),
        y_label: "\u{0394}v [km s^{-1}]".into(),
        series: vec![
            Series {
                label: "sample".into(),
                style: 5,
                points: pts,
                y_errors: Some(ye),
                line: Some(vec![(-2.5, -1.5), (4.5, 4.1)]),
                ..Default::default()
            },
            Series {
                label: "nothing".into(),
                style: 1,
                ..Default::default()
            },
        ],
        notes: vec!["y = 0.80 x + 0.50".into()],
        ..Default::default()
    }
}

fn save(name: &str, bytes: &[u8]) {
    if let Ok(dir) = std::env::var("CAIRN_PLOT_DIR") {
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(std::path::Path::new(&dir).join(name), bytes).unwrap();
    }
}

fn all_plots() -> Vec<(&'static str, Plot)> {
    vec![
        ("mass_function", mass_function_plot()),
        ("mass_size", mass_size_plot()),
        ("linear", linear_plot()),
    ]
}

#[test]
fn svg_parses_with_a_group_per_series_and_the_guides() {
    for (name, p) in all_plots() {
        let svg = plot_svg(&p, 1100, 300.0).unwrap();
        save(&format!("{name}.svg"), svg.as_bytes());
        let doc = roxmltree::Document::parse(&svg).unwrap();
        let groups: Vec<_> = doc.descendants().filter(|n| n.has_tag_name("g")).collect();
        for (i, s) in p.series.iter().enumerate() {
            let g: Vec<_> = groups
                .iter()
                .filter(|g| g.attribute("id") == Some(format!("series-{i}").as_str()))
                .collect();
            assert_eq!(g.len(), 1, "{name}: series {i}");
            let class = g[0].attribute("class").unwrap();
            assert!(class.split(' ').any(|c| c == "series"));
            assert!(class.split(' ').any(|c| c == format!("style-{}", s.style)));
            assert_eq!(g[0].attribute("aria-label"), Some(s.label.as_str()));
            // Drawn series have their paths inside their own group.
            if !s.points.is_empty() {
                assert!(
                    g[0].children().any(|c| c.has_tag_name("path")),
                    "{name}: {i}"
                );
            }
        }
        let series_groups = groups
            .iter()
            .filter(|g| {
                g.attribute("class")
                    .is_some_and(|c| c.split(' ').any(|c| c == "series"))
            })
            .count();
        assert_eq!(series_groups, p.series.len());
        let guides = groups
            .iter()
            .find(|g| g.attribute("id") == Some("guides"))
            .expect("a guides group");
        let guide_paths = guides
            .children()
            .filter(|c| {
                c.attribute("class")
                    .is_some_and(|c| c.split(' ').any(|c| c == "guide"))
            })
            .count();
        assert_eq!(guide_paths, p.guides.len(), "{name}");
        // Every clipped element refers to the frame's clip path, which exists.
        assert!(
            doc.descendants()
                .any(|n| n.has_tag_name("clipPath") && n.attribute("id") == Some("frame-clip"))
        );
    }
}

#[path = "common/svg_layout.rs"]
mod svg_layout;

/// The label text size of the plots at `dpi`: 9-point text, labels 0.9 of it.
fn label_size(dpi: f64) -> f64 {
    0.9 * 9.0 * dpi / 72.0
}

/// Checks the guide labels of a plot's SVG as a reader sees them (see
/// `svg_layout::check_guide_labels`) and that every one is written along its own line: inside
/// the frame by a quarter of 9-point text (as cairn keeps them), apart, its centre within a
/// twentieth of a letter of its line and its baseline within 1.5 degrees of it, the line cut
/// under it, and every other guide at least 0.3 of 9-point text from it. Returns the labels'
/// angles on the page.
fn check_labels(svg: &str, dpi: f64) -> Vec<f64> {
    let lfs = label_size(dpi);
    let fs = lfs / 0.9;
    let rules = svg_layout::LabelRules {
        lfs,
        margin: 0.24 * fs,
        clear: 0.29 * fs,
        on: 0.05 * lfs,
        degrees: 1.5,
        near: 0.8 * lfs,
        beside: 0.5 * lfs,
    };
    svg_layout::check_guide_labels(svg, rules)
        .into_iter()
        .map(|(name, placed)| match placed {
            svg_layout::Placed::Along(a) => a,
            svg_layout::Placed::Level => panic!("label {name} is not written along its line"),
        })
        .collect()
}

/// The guides' labels on the invented mass-size plot: written along their own lines, which
/// rise on the page, so every label is turned (read back from the SVG).
#[test]
fn guide_labels_are_written_along_their_own_lines() {
    for width in [1100, 1600] {
        let svg = plot_svg(&mass_size_plot(), width, 300.0).unwrap();
        let angles = check_labels(&svg, 300.0);
        assert_eq!(angles.len(), 3);
        for a in angles {
            assert!(
                a > 5.0 && a < 85.0,
                "a label at {a} degrees on rising lines"
            );
        }
    }
}

/// Two guides that cross inside the frame, on invented data. `shallow`: two power laws of
/// slopes 2 and 1.5 on logarithmic axes, crossing in the middle at a small angle on the page,
/// so that they run close together over a long stretch; otherwise a rising and a falling
/// straight line on linear axes. Markers crowd the outer quarters of both lines, where labels
/// would otherwise go, so the labels are drawn towards the crossing.
fn crossing_plot(shallow: bool) -> Plot {
    let mut u = Uniform(if shallow { 31 } else { 37 });
    type Lines = Vec<(&'static str, fn(f64) -> f64)>;
    let (lines, scale, xr, yr): (Lines, AxisScale, (f64, f64), (f64, f64)) = if shallow {
        (
            vec![
                ("N = 10^{22} cm^{-2}", |x| x * x),
                ("M_{BE}, 10 K", |x| 10f64.sqrt() * x.powf(1.5)),
            ],
            AxisScale::Log10,
            (1.0, 100.0),
            (1.0, 1e4),
        )
    } else {
        (
            vec![("rising line", |x| x), ("falling line", |x| 10.0 - x)],
            AxisScale::Linear,
            (0.0, 10.0),
            (0.0, 10.0),
        )
    };
    // x at a fraction t of the axis.
    let at = |t: f64| {
        if shallow {
            xr.0 * (xr.1 / xr.0).powf(t)
        } else {
            xr.0 + t * (xr.1 - xr.0)
        }
    };
    let mut pts = Vec::new();
    for (_, f) in &lines {
        for _ in 0..16 {
            // Along the outer quarters of each line, a little off it.
            let t = 0.02 + 0.23 * u.next();
            for t in [t, 1.0 - t] {
                let x = at(t);
                let jitter = if shallow {
                    10f64.powf(0.15 * (u.next() - 0.5))
                } else {
                    1.0 + 0.1 * (u.next() - 0.5)
                };
                pts.push((x, f(x) * jitter));
            }
        }
    }
    Plot {
        x_label: "x".into(),
        y_label: "y".into(),
        x_scale: scale,
        y_scale: scale,
        x_range: Some(xr),
        y_range: Some(yr),
        series: vec![Series {
            label: "data".into(),
            points: pts,
            ..Default::default()
        }],
        guides: lines
            .iter()
            .map(|(label, f)| Guide {
                label: (*label).into(),
                points: (0..=40)
                    .map(|k| at(k as f64 / 40.0))
                    .map(|x| (x, f(x)))
                    .collect(),
            })
            .collect(),
        ..Default::default()
    }
}

/// The centres and radii of the markers drawn in an SVG plot (each marker is one subpath of
/// a `markers` path; its points' box is the marker's).
fn markers(svg: &str) -> Vec<((f64, f64), f64)> {
    let doc = roxmltree::Document::parse(svg).unwrap();
    doc.descendants()
        .filter(|n| {
            n.has_tag_name("path")
                && n.attribute("class")
                    .is_some_and(|c| c.split(' ').any(|c| c == "markers"))
        })
        .flat_map(|n| svg_layout::subpaths(n.attribute("d").unwrap()))
        .map(|ring| {
            let b = ring.iter().fold(
                (
                    f64::INFINITY,
                    f64::INFINITY,
                    f64::NEG_INFINITY,
                    f64::NEG_INFINITY,
                ),
                |b, &(x, y)| (b.0.min(x), b.1.min(y), b.2.max(x), b.3.max(y)),
            );
            (
                (0.5 * (b.0 + b.2), 0.5 * (b.1 + b.3)),
                0.5 * (b.2 - b.0).max(b.3 - b.1),
            )
        })
        .collect()
}

/// Guides that cross inside the frame (at a right angle, and at a small one): each label is
/// on its own line and clear of the other, read from the SVG.
#[test]
fn labels_of_crossing_guides_are_each_on_their_own_line() {
    for shallow in [false, true] {
        for width in [1100, 1600] {
            let p = crossing_plot(shallow);
            let svg = plot_svg(&p, width, 300.0).unwrap();
            let name = format!(
                "crossing_{}_{width}",
                if shallow { "shallow" } else { "square" }
            );
            save(&format!("{name}.svg"), svg.as_bytes());
            save(&format!("{name}.png"), &plot_png(&p, width, 300.0).unwrap());
            let angles = check_labels(&svg, 300.0);
            assert_eq!(angles.len(), 2);
            if !shallow {
                // The middle of both lines is free of data, so no label touches a marker (nor
                // its white halo, 0.125 of 9-point text wide).
                let halo = 0.125 * 9.0 * 300.0 / 72.0;
                for lab in svg_layout::guide_layout(&svg).labels {
                    let b = lab.centred_box();
                    for (c, r) in markers(&svg) {
                        let (u, v) = lab.own(c);
                        assert!(
                            u.abs() > b.2 + r + halo || v.abs() > b.3 + r + halo,
                            "label {} covers the marker at {c:?}",
                            lab.name
                        );
                    }
                }
            }
            // One line rises, the other falls (square) or both rise (shallow), as drawn.
            if shallow {
                assert!(angles.iter().all(|&a| a > 10.0), "{angles:?}");
            } else {
                assert!(angles[0] * angles[1] < 0.0, "{angles:?}");
            }
        }
    }
}

/// The PNG shows a turned label where the SVG puts it: on a plot with one guide and nothing
/// else in the frame, the dark pixels inside the frame (the label's glyphs) lie within the
/// label's turned box from the SVG, and their principal axis runs along its baseline.
#[test]
fn png_shows_the_label_turned_as_the_svg_does() {
    let p = Plot {
        x_label: "x".into(),
        y_label: "y".into(),
        x_range: Some((0.0, 10.0)),
        y_range: Some((0.0, 10.0)),
        guides: vec![Guide {
            label: "along a line of slope two".into(),
            points: vec![(0.0, 0.0), (5.0, 10.0)],
        }],
        ..Default::default()
    };
    let (w, dpi) = (1100, 300.0);
    let svg = plot_svg(&p, w, dpi).unwrap();
    check_labels(&svg, dpi);
    let l = svg_layout::guide_layout(&svg);
    let lab = &l.labels[0];
    let png = image::load_from_memory(&plot_png(&p, w, dpi).unwrap())
        .unwrap()
        .to_rgb8();
    // Inside the frame, clear of its ticks (at most 0.45 of 9-point text long).
    let inset = 0.5 * 9.0 * dpi / 72.0;
    let mut dark = Vec::new();
    for (x, y, px) in png.enumerate_pixels() {
        let (cx, cy) = (x as f64 + 0.5, y as f64 + 0.5);
        let inside = cx > l.frame.0 + inset
            && cx < l.frame.2 - inset
            && cy > l.frame.1 + inset
            && cy < l.frame.3 - inset;
        if inside && px.0.iter().all(|&c| c < 100) {
            dark.push((cx, cy));
        }
    }
    assert!(dark.len() > 1000, "{} dark pixels", dark.len());
    let b = lab.centred_box();
    for &q in &dark {
        let (u, v) = lab.own(q);
        assert!(
            u.abs() <= b.2 + 1.5 && v.abs() <= b.3 + 1.5,
            "a dark pixel at {q:?} outside the label's turned box"
        );
    }
    let n = dark.len() as f64;
    let (mx, my) = dark
        .iter()
        .fold((0.0, 0.0), |a, q| (a.0 + q.0 / n, a.1 + q.1 / n));
    let (sxx, syy, sxy) = dark.iter().fold((0.0, 0.0, 0.0), |a, q| {
        let (dx, dy) = (q.0 - mx, q.1 - my);
        (a.0 + dx * dx, a.1 + dy * dy, a.2 + dx * dy)
    });
    let axis = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    let (ux, uy) = lab.direction();
    let along = uy.atan2(ux);
    let diff = (axis - along).to_degrees();
    assert!(
        diff.abs() < 2.0,
        "ink axis {:.2} degrees off the baseline",
        diff
    );
    // The line rises at about 63 degrees in value, less on the 4:3 frame.
    assert!((-uy).atan2(ux).to_degrees() > 45.0);
}

#[test]
fn png_decodes_at_the_requested_width() {
    for (name, p) in all_plots() {
        for (w, dpi) in [(1100u32, 300.0), (700, 150.0)] {
            let png = plot_png(&p, w, dpi).unwrap();
            if w == 1100 {
                save(&format!("{name}.png"), &png);
            }
            let img = image::load_from_memory(&png).unwrap();
            assert_eq!(img.width(), w, "{name}");
            let ax = plot_axes(&p, w, dpi).unwrap();
            assert_eq!(img.height(), ax.height);
            assert!(img.height() > w / 2 && img.height() < w);
            // The PDF is one page of the same print size: 72 points to the inch
            // (ISO 32000-1 sec. 8.3.2.3), written as 32-bit numbers.
            let pdf = plot_pdf(&p, w, dpi).unwrap();
            let text = String::from_utf8_lossy(&pdf);
            let at = text.find("/MediaBox [0 0 ").unwrap() + "/MediaBox [0 0 ".len();
            let size: Vec<f64> = text[at..at + text[at..].find(']').unwrap()]
                .split_whitespace()
                .map(|t| t.parse().unwrap())
                .collect();
            assert!((size[0] - w as f64 / dpi * 72.0).abs() < 1e-3, "{name}");
            assert!(
                (size[1] - ax.height as f64 / dpi * 72.0).abs() < 1e-3,
                "{name}"
            );
            assert_eq!(text.matches("/Type /Page\n").count(), 1, "{name}");
            assert_eq!(
                pdf,
                plot_pdf(&p, w, dpi).unwrap(),
                "{name}: PDF bytes repeat"
            );
        }
    }
}

/// Labelled values are whole multiples of a 1-2-5 step (linear) or 1, 2 or 5 times a power
/// of ten (log); positions increase with value and are linear in value (or its log10).
fn check_ticks(ticks: &[PlotTick], log: bool, start: f64, end: f64) {
    let major: Vec<&PlotTick> = ticks.iter().filter(|t| t.label.is_some()).collect();
    assert!(major.len() >= 2, "{ticks:?}");
    let t = |v: f64| if log { v.log10() } else { v };
    // Linear in (transformed) value, fitted through the first and last tick.
    let (a, b) = (&ticks[0], &ticks[ticks.len() - 1]);
    let slope = (b.position - a.position) / (t(b.value) - t(a.value));
    let scale = (end - start).abs();
    for k in ticks {
        let want = a.position + slope * (t(k.value) - t(a.value));
        assert!(
            (k.position - want).abs() <= 1e-9 * scale,
            "tick {} at {} not at {want}",
            k.value,
            k.position
        );
    }
    let mut sorted: Vec<&PlotTick> = ticks.iter().collect();
    sorted.sort_by(|p, q| p.value.total_cmp(&q.value));
    let dir = (end - start).signum();
    for w in sorted.windows(2) {
        assert!((w[1].position - w[0].position) * dir > 0.0);
    }
    let mantissa_ok = |v: f64| {
        let v = v.abs();
        let mant = v / 10f64.powf(v.log10().floor());
        [1.0, 2.0, 5.0, 10.0]
            .iter()
            .any(|m| (mant - m).abs() < 1e-9)
    };
    // Log axes label 1, 2 or 5 times powers of ten; on narrow log axes, and on linear ones,
    // labels are whole multiples of a 1-2-5 step.
    if log && major.iter().all(|k| mantissa_ok(k.value)) {
        return;
    }
    let step = (major[1].value - major[0].value).abs();
    assert!(mantissa_ok(step), "step {step}");
    for k in &major {
        let q = k.value / step;
        assert!(
            (q - q.round()).abs() < 1e-9,
            "{} is not a multiple of {step}",
            k.value
        );
    }
}

#[test]
fn ticks_are_round_and_placed_linearly() {
    for (lo, hi) in [
        (0.0, 1.0),
        (-3.7, 12.2),
        (1234.0, 1299.0),
        (-1e-4, 3e-4),
        (2e5, 9e7),
        (0.013, 0.0171),
    ] {
        let t = scale_ticks(AxisScale::Linear, lo, hi, 100.0, 900.0, 7);
        check_ticks(&t, false, 100.0, 900.0);
        let t = scale_ticks(AxisScale::Linear, lo, hi, 700.0, 50.0, 5);
        check_ticks(&t, false, 700.0, 50.0);
    }
    for (lo, hi) in [
        (0.05, 200.0),
        (3e19, 2e23),
        (1e-12, 1e12),
        (1.5, 30.0),
        (3.0, 4.5),
        (0.9, 1.2),
    ] {
        let t = scale_ticks(AxisScale::Log10, lo, hi, 100.0, 900.0, 7);
        check_ticks(&t, true, 100.0, 900.0);
        assert!(
            t.iter()
                .all(|k| k.value >= lo * (1.0 - 1e-9) && k.value <= hi * (1.0 + 1e-9))
        );
    }
    // The ticks of a whole plot, in figure pixels.
    for (_, p) in all_plots() {
        let ax = plot_axes(&p, 1100, 300.0).unwrap();
        let (fx, fy, fw, fh) = ax.frame;
        check_ticks(&ax.x_ticks, p.x_scale == AxisScale::Log10, fx, fx + fw);
        check_ticks(&ax.y_ticks, p.y_scale == AxisScale::Log10, fy + fh, fy);
        for t in &ax.x_ticks {
            assert!(t.position >= fx - 1e-9 && t.position <= fx + fw + 1e-9);
        }
    }
}

#[test]
fn log_axes_skip_values_that_cannot_be_shown() {
    let p = Plot {
        x_label: "x".into(),
        y_label: "y".into(),
        x_scale: AxisScale::Log10,
        y_scale: AxisScale::Log10,
        series: vec![
            Series {
                label: "mixed".into(),
                points: vec![
                    (0.0, 1.0),
                    (-1.0, 5.0),
                    (1.0, -2.0),
                    (2.0, 3.0),
                    (f64::NAN, 1.0),
                    (4.0, f64::INFINITY),
                    (8.0, 30.0),
                ],
                y_errors: Some(vec![(-1.0, 2.0); 7]),
                x_errors: Some(vec![(-1.0, 0.0); 7]),
                line: Some(vec![(0.0, 0.0), (1.0, 1.0), (-3.0, 2.0), (10.0, 10.0)]),
                ..Default::default()
            },
            Series {
                label: "steps".into(),
                style: 1,
                points: vec![(1.0, 0.0), (2.0, 4.0), (-4.0, 2.0), (8.0, 0.0)],
                steps: true,
                ..Default::default()
            },
            Series::default(),
        ],
        guides: vec![Guide {
            label: "g".into(),
            points: vec![(-1.0, 1.0), (0.0, 0.0)],
        }],
        ..Default::default()
    };
    let ax = plot_axes(&p, 800, 200.0).unwrap();
    assert!(ax.x_range.0 > 0.0 && ax.y_range.0 > 0.0);
    assert!(ax.x_range.0 < 2.0 && ax.x_range.1 > 8.0);
    save("log_skips.png", &plot_png(&p, 800, 200.0).unwrap());
    roxmltree::Document::parse(&plot_svg(&p, 800, 200.0).unwrap()).unwrap();
    // Nothing at all to show, on either kind of axis.
    for scale in [AxisScale::Linear, AxisScale::Log10] {
        let empty = Plot {
            x_scale: scale,
            y_scale: scale,
            series: vec![Series {
                label: "empty".into(),
                ..Default::default()
            }],
            ..Default::default()
        };
        let png = plot_png(&empty, 600, 150.0).unwrap();
        assert_eq!(image::load_from_memory(&png).unwrap().width(), 600);
        plot_svg(&empty, 600, 150.0).unwrap();
    }
    // A single point still gets a range around it.
    let one = Plot {
        x_scale: AxisScale::Log10,
        series: vec![Series {
            points: vec![(3.0, 3.0)],
            ..Default::default()
        }],
        ..Default::default()
    };
    let ax = plot_axes(&one, 600, 150.0).unwrap();
    assert!(ax.x_range.0 < 3.0 && ax.x_range.1 > 3.0);
    assert!(ax.y_range.0 < 3.0 && ax.y_range.1 > 3.0);
}

#[test]
fn bad_input_is_refused_not_drawn() {
    let mut p = mass_function_plot();
    p.x_range = Some((0.0, 10.0));
    assert!(plot_png(&p, 800, 200.0).is_err());
    p.x_range = Some((5.0, 1.0));
    assert!(plot_png(&p, 800, 200.0).is_err());
    let mut p = mass_function_plot();
    p.series[0].y_errors.as_mut().unwrap().pop();
    assert!(plot_svg(&p, 800, 200.0).is_err());
    assert!(plot_png(&mass_function_plot(), 40, 300.0).is_err());
    assert!(plot_png(&mass_function_plot(), 800, 0.0).is_err());
}

#[test]
fn identical_bytes_on_a_second_render() {
    for (_, p) in all_plots() {
        assert_eq!(
            plot_png(&p, 900, 250.0).unwrap(),
            plot_png(&p, 900, 250.0).unwrap()
        );
        assert_eq!(
            plot_svg(&p, 900, 250.0).unwrap(),
            plot_svg(&p, 900, 250.0).unwrap()
        );
    }
}

/// A recovered-fraction plot (points along the top of the frame) with a legend and wide notes:
/// the two are placed together, so that neither covers a marker nor the other (the legend
/// stacked on the notes in the lower corner rather than on the points above). Read from the
/// SVG.
#[test]
fn legend_and_notes_leave_the_points_clear_together() {
    let xs: Vec<f64> = (0..8).map(|i| 0.5 * 1.6f64.powi(i)).collect();
    let pts: Vec<(f64, f64)> = xs
        .iter()
        .enumerate()
        .map(|(i, &x)| (x, if i == 1 { 0.89 } else { 1.0 }))
        .collect();
    let curve: Vec<(f64, f64)> = (0..50)
        .map(|i| {
            let x = 0.4 * 40f64.powf(i as f64 / 49.0);
            (x, 1.0 / (1.0 + (-(3.4 + 3.5 * x.log10())).exp()))
        })
        .collect();
    let p = Plot {
        x_label: "true mass [M_{sun}]".into(),
        y_label: "recovered fraction".into(),
        x_scale: AxisScale::Log10,
        y_range: Some((0.0, 1.05)),
        series: vec![
            Series {
                label: "recovered".into(),
                style: 0,
                points: pts,
                ..Default::default()
            },
            Series {
                label: "logistic fit".into(),
                style: 1,
                line: Some(curve),
                ..Default::default()
            },
        ],
        notes: vec![
            "29 of 30 injected cores recovered".into(),
            "90% complete above 1.001 M_{sun}".into(),
            "logistic fit: 90% at 0.451 M_{sun} (extrapolated)".into(),
        ],
        ..Default::default()
    };
    let svg = plot_svg(&p, 1200, 300.0).unwrap();
    save("legend_and_notes.svg", svg.as_bytes());
    let group_bounds = |id: &str| svg_group_and_size(&svg, id).0;
    let (legend, notes) = (group_bounds("legend"), group_bounds("notes"));
    assert!(!svg_layout::overlap(legend, notes), "{legend:?} {notes:?}");
    let m = markers(&svg);
    assert_eq!(m.len(), 8);
    for ((x, y), r) in m {
        let b = (x - r, y - r, x + r, y + r);
        assert!(
            !svg_layout::overlap(b, legend) && !svg_layout::overlap(b, notes),
            "marker at ({x}, {y}) under {legend:?} or {notes:?}"
        );
    }
}

/// The bounds of the paths of the SVG group `id` (text is drawn as paths), and the figure's
/// size from its view box.
fn svg_group_and_size(svg: &str, id: &str) -> (svg_layout::Bounds, (f64, f64)) {
    let doc = roxmltree::Document::parse(svg).unwrap();
    let vb: Vec<f64> = doc
        .root_element()
        .attribute("viewBox")
        .unwrap()
        .split_whitespace()
        .map(|v| v.parse().unwrap())
        .collect();
    let g = doc
        .descendants()
        .find(|n| n.attribute("id") == Some(id))
        .unwrap_or_else(|| panic!("group {id}"));
    let b = g
        .descendants()
        .filter_map(|n| n.attribute("d"))
        .map(svg_layout::bounds)
        .fold(
            (
                f64::INFINITY,
                f64::INFINITY,
                f64::NEG_INFINITY,
                f64::NEG_INFINITY,
            ),
            |b, c| (b.0.min(c.0), b.1.min(c.1), b.2.max(c.2), b.3.max(c.3)),
        );
    (b, (vb[2], vb[3]))
}

/// Notes wider than the frame at a narrow width (a width compare accepts) go under the plot,
/// wrapped to the figure's width, a value never parted from its unit, and the figure grows to
/// hold them; at a wide width the same notes fit in a clear corner of the frame. A series
/// drawn pale is marked so in the SVG and has no legend entry. Read from the SVG.
#[test]
fn notes_too_wide_for_the_frame_go_under_the_plot() {
    let m = power_law_masses(400, 2.35, 0.5, 3);
    let mut mf = mass_function(&m);
    mf.label = "a population".into();
    let note =
        "a population: alpha = 2.35 ± 0.10 above 0.500 M_{sun} (bootstrap over 1000 resamples)";
    let p = |notes: Vec<String>| Plot {
        x_label: "M [M_{sun}]".into(),
        y_label: "dN/dlog_{10}M".into(),
        x_scale: AxisScale::Log10,
        y_scale: AxisScale::Log10,
        series: vec![
            mf.clone(),
            Series {
                style: 1,
                points: vec![(0.2, 30.0), (0.3, 40.0)],
                faded: true,
                ..Default::default()
            },
        ],
        notes,
        ..Default::default()
    };
    for (width, under) in [(700, true), (4000, false)] {
        let svg = plot_svg(&p(vec![note.into()]), width, 300.0).unwrap();
        let bare = plot_svg(&p(vec![]), width, 300.0).unwrap();
        save(&format!("notes_{width}.svg"), svg.as_bytes());
        let (notes, (w, h)) = svg_group_and_size(&svg, "notes");
        let (_, (_, h_bare)) = svg_group_and_size(&bare, "notes");
        let frame_bottom = svg
            .split("<clipPath id=\"frame-clip\"><rect ")
            .nth(1)
            .map(|r| {
                let num = |k: &str| -> f64 {
                    r.split(&format!("{k}=\""))
                        .nth(1)
                        .unwrap()
                        .split('"')
                        .next()
                        .unwrap()
                        .parse()
                        .unwrap()
                };
                num("y") + num("height")
            })
            .unwrap();
        // Inside the figure, whatever the placement.
        assert!(
            notes.0 >= 0.0 && notes.2 <= w && notes.3 <= h,
            "{width}: {notes:?} in {w} x {h}"
        );
        if under {
            assert!(
                notes.1 > frame_bottom,
                "{width}: notes {notes:?}, frame to {frame_bottom}"
            );
            assert!(h > h_bare, "{width}: {h} against {h_bare} without notes");
            // Wrapped: the note's text makes several lines.
            let lines =
                svg.matches("class=\"text\"").count() - bare.matches("class=\"text\"").count();
            assert!(lines >= 2, "{width}: {lines} lines of notes");
        } else {
            assert!(
                notes.3 < frame_bottom,
                "{width}: notes {notes:?}, frame to {frame_bottom}"
            );
            assert_eq!(h, h_bare);
        }
        assert!(svg.contains(" faded\""), "the pale series is marked");
        assert_eq!(svg.matches("legend-sample").count(), 1, "one legend entry");
    }
}

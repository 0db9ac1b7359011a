//! Checks of the x-y plots on invented data (power-law mass samples, a made-up mass-size
//! relation): well-formed SVG with one group per series and the guides, decodable PNG of the
//! requested width, round ticks placed linearly (or log-linearly) in value, points that
//! cannot be shown on log axes skipped without error, identical bytes on a second render.
//!
//! With `CAIRN_PLOT_DIR` set, the figures are also written there to be looked at.

use cairn::render::plot::{
    AxisScale, Guide, Plot, PlotTick, Series, plot_axes, plot_png, plot_svg, scale_ticks,
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

/// The guides' labels on the invented mass-size plot: inside the frame, clear of each other,
/// crossed by no guide and nearest their own (read back from the SVG).
#[test]
fn guide_labels_sit_by_their_own_lines() {
    for width in [1100, 1600] {
        let svg = plot_svg(&mass_size_plot(), width, 300.0).unwrap();
        let lfs = 0.9 * 9.0 * 300.0 / 72.0;
        svg_layout::check_guide_labels(&svg, 0.0, 0.5 * lfs, 0.8 * lfs);
    }
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

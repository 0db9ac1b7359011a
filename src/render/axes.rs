//! Axis ticks: round coordinate values and where their coordinate lines cross the frame.
//!
//! With sky coordinates, a step is chosen from a list of round steps in the units a reader
//! expects (right ascension in time units, declination in degrees, arcminutes and arcseconds,
//! galactic coordinates in decimal degrees), the tick values are the multiples of the step in
//! the map's range, and each tick is placed where the line of constant coordinate, traced
//! through the projection, meets a frame edge (sampled, then refined by bisection). This keeps
//! ticks right for rotated and curved projections. Without sky coordinates the axes count
//! pixels.

use super::SkyAxes;

/// Which coordinate a tick belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Coord {
    /// Right ascension or galactic longitude.
    Lon,
    /// Declination or galactic latitude.
    Lat,
    /// Pixel column.
    X,
    /// Pixel row.
    Y,
}

/// A frame edge.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Edge {
    Bottom,
    Left,
    Top,
    Right,
}

/// One tick: the coordinate value (degrees for sky coordinates, pixels otherwise), its label
/// (with the small markup of [`super::plain_text`]: `^{h}` raises), and the map pixel position
/// where the coordinate line meets the frame edge. Ticks on the bottom and left edges carry
/// labels in the figure; ticks on the top and right edges are drawn as marks only.
#[derive(Debug, Clone, PartialEq)]
pub struct Tick {
    pub coord: Coord,
    pub value: f64,
    pub label: String,
    pub edge: Edge,
    pub x: f64,
    pub y: f64,
}

/// The ticks of a frame and the axis titles.
#[derive(Debug, Clone, PartialEq)]
pub struct AxisTicks {
    pub ticks: Vec<Tick>,
    pub bottom_title: String,
    pub left_title: String,
}

/// A zoom window in pixels: x0, y0, width, height.
pub type Region = (usize, usize, usize, usize);

fn wrap180(d: f64) -> f64 {
    (d + 540.0).rem_euclid(360.0) - 180.0
}

/// Round steps, in the label unit's smallest step (0.1 s of time for RA, 0.1 arcsec for Dec).
const RA_STEPS_DECISEC: &[i64] = &[
    1, 2, 5, 10, 20, 50, 100, 150, 300, 600, 1200, 3000, 6000, 9000, 18000, 36000, 72000, 108000,
    216000,
];
const DEC_STEPS_DECIARCSEC: &[i64] = &[
    1, 2, 5, 10, 20, 50, 100, 150, 300, 600, 1200, 3000, 6000, 9000, 18000, 36000, 72000, 180000,
    360000, 540000, 1080000,
];

/// Galactic and pixel steps: 1, 2, 5 times powers of ten, as (mantissa, exponent).
fn decimal_steps() -> Vec<(i64, i32)> {
    let mut v = Vec::new();
    for e in -6..=3 {
        for m in [1, 2, 5] {
            v.push((m, e));
        }
    }
    v
}

/// Kind of labels on a sky axis.
#[derive(Clone, Copy, PartialEq)]
enum Kind {
    Ra,
    Dec,
    Deg,
    Pixel,
}

/// A chosen step: its size in the coordinate's unit (degrees or pixels) and how to label.
#[derive(Clone, Copy)]
struct Step {
    kind: Kind,
    /// In label units (0.1 s, 0.1 arcsec) for Ra/Dec; mantissa for Deg/Pixel.
    units: i64,
    /// Exponent of ten for Deg/Pixel.
    exp: i32,
    /// Labels wrap into [0, 360) (longitudes).
    wrap: bool,
}

impl Step {
    fn size(&self) -> f64 {
        match self.kind {
            Kind::Ra => self.units as f64 * 15.0 / 36000.0,
            Kind::Dec => self.units as f64 / 36000.0,
            Kind::Deg | Kind::Pixel => self.units as f64 * 10f64.powi(self.exp),
        }
    }
    /// The value of the k-th multiple, exact in the label's integer units.
    fn value(&self, k: i64) -> f64 {
        match self.kind {
            Kind::Ra => (k * self.units) as f64 * 15.0 / 36000.0,
            Kind::Dec => (k * self.units) as f64 / 36000.0,
            Kind::Deg | Kind::Pixel => {
                if self.exp >= 0 {
                    (k * self.units) as f64 * 10f64.powi(self.exp)
                } else {
                    (k * self.units) as f64 / 10f64.powi(-self.exp)
                }
            }
        }
    }
    fn label(&self, k: i64) -> String {
        match self.kind {
            Kind::Ra => {
                let n = (k * self.units).rem_euclid(864000);
                let (h, rest) = (n / 36000, n % 36000);
                let (m, rest) = (rest / 600, rest % 600);
                let (s, ds) = (rest / 10, rest % 10);
                if self.units % 36000 == 0 {
                    format!("{h}^{{h}}")
                } else if self.units % 600 == 0 {
                    format!("{h}^{{h}}{m:02}^{{m}}")
                } else if self.units % 10 == 0 {
                    format!("{h}^{{h}}{m:02}^{{m}}{s:02}^{{s}}")
                } else {
                    format!("{h}^{{h}}{m:02}^{{m}}{s:02}.{ds}^{{s}}")
                }
            }
            Kind::Dec => {
                let n = k * self.units;
                let sign = if n < 0 { "\u{2212}" } else { "" };
                let n = n.abs();
                let (d, rest) = (n / 36000, n % 36000);
                let (m, rest) = (rest / 600, rest % 600);
                let (s, ds) = (rest / 10, rest % 10);
                if self.units % 36000 == 0 {
                    format!("{sign}{d}°")
                } else if self.units % 600 == 0 {
                    format!("{sign}{d}°{m:02}′")
                } else if self.units % 10 == 0 {
                    format!("{sign}{d}°{m:02}′{s:02}″")
                } else {
                    format!("{sign}{d}°{m:02}′{s:02}.{ds}″")
                }
            }
            Kind::Deg | Kind::Pixel => {
                let mut n = k * self.units;
                if self.wrap {
                    // Longitudes are labelled in [0, 360).
                    let full = if self.exp >= 0 {
                        360 / 10i64.pow(self.exp as u32)
                    } else {
                        360 * 10i64.pow((-self.exp) as u32)
                    };
                    n = n.rem_euclid(full);
                }
                let unit = if self.kind == Kind::Deg { "°" } else { "" };
                fixed_label(n, self.exp, unit)
            }
        }
    }
}

/// n times 10^exp written in fixed notation with a true minus sign.
fn fixed_label(n: i64, exp: i32, unit: &str) -> String {
    let sign = if n < 0 { "\u{2212}" } else { "" };
    let a = n.unsigned_abs();
    if exp >= 0 {
        format!("{sign}{}{unit}", a * 10u64.pow(exp as u32))
    } else {
        let p = 10u64.pow((-exp) as u32);
        format!(
            "{sign}{}.{:0width$}{unit}",
            a / p,
            a % p,
            width = (-exp) as usize
        )
    }
}

fn choose_step(kind: Kind, wrap: bool, span: f64, max_ticks: usize) -> Step {
    let max_ticks = max_ticks.max(1) as f64;
    let cands: Vec<Step> = match kind {
        Kind::Ra => RA_STEPS_DECISEC
            .iter()
            .map(|&u| Step {
                kind,
                units: u,
                exp: 0,
                wrap,
            })
            .collect(),
        Kind::Dec => DEC_STEPS_DECIARCSEC
            .iter()
            .map(|&u| Step {
                kind,
                units: u,
                exp: 0,
                wrap,
            })
            .collect(),
        Kind::Deg | Kind::Pixel => decimal_steps()
            .into_iter()
            .filter(|&(_, e)| if kind == Kind::Deg { e <= 1 } else { e >= 0 })
            .map(|(m, e)| Step {
                kind,
                units: m,
                exp: e,
                wrap,
            })
            .collect(),
    };
    for c in &cands {
        if span / c.size() <= max_ticks {
            return *c;
        }
    }
    *cands.last().expect("step lists are not empty")
}

/// Finds the parameters t in [0, 1] where f(t) crosses zero along an edge.
fn crossings(f: &dyn Fn(f64) -> Option<f64>) -> Vec<f64> {
    const N: usize = 256;
    let samples: Vec<Option<f64>> = (0..=N).map(|i| f(i as f64 / N as f64)).collect();
    let mut roots: Vec<f64> = Vec::new();
    for i in 0..N {
        let (Some(a), Some(b)) = (samples[i], samples[i + 1]) else {
            continue;
        };
        let (ta, tb) = (i as f64 / N as f64, (i + 1) as f64 / N as f64);
        if a == 0.0 {
            if roots.last().is_none_or(|&r| (r - ta).abs() > 1e-9) {
                roots.push(ta);
            }
            continue;
        }
        if i + 1 == N && b == 0.0 {
            roots.push(tb);
            continue;
        }
        if (a < 0.0) == (b < 0.0) || b == 0.0 || (a - b).abs() > 90.0 {
            continue;
        }
        let (mut lo, mut hi, mut flo) = (ta, tb, a);
        let mut ok = true;
        for _ in 0..80 {
            let mid = 0.5 * (lo + hi);
            let Some(fm) = f(mid) else {
                ok = false;
                break;
            };
            if fm == 0.0 {
                lo = mid;
                hi = mid;
                break;
            }
            if (fm < 0.0) == (flo < 0.0) {
                lo = mid;
                flo = fm;
            } else {
                hi = mid;
            }
        }
        if ok {
            roots.push(0.5 * (lo + hi));
        }
    }
    roots
}

/// Ticks for a frame showing `region` of a map, with at most about `max_bottom` values along
/// the bottom edge's coordinate and `max_left` along the left edge's.
pub fn axis_ticks(
    sky: Option<&dyn SkyAxes>,
    region: Region,
    max_bottom: usize,
    max_left: usize,
) -> AxisTicks {
    let (x0, y0, w, h) = region;
    let xl = x0 as f64 - 0.5;
    let xr = (x0 + w) as f64 - 0.5;
    let yb = y0 as f64 - 0.5;
    let yt = (y0 + h) as f64 - 0.5;
    let edges = [
        (Edge::Bottom, (xl, yb), (xr, yb)),
        (Edge::Top, (xl, yt), (xr, yt)),
        (Edge::Left, (xl, yb), (xl, yt)),
        (Edge::Right, (xr, yb), (xr, yt)),
    ];
    let Some(sky) = sky else {
        let mut ticks = Vec::new();
        for (coord, lo, hi, n) in [(Coord::X, xl, xr, max_bottom), (Coord::Y, yb, yt, max_left)] {
            let step = choose_step(Kind::Pixel, false, hi - lo, n);
            let s = step.size();
            let k0 = (lo / s).ceil() as i64;
            let k1 = (hi / s).floor() as i64;
            for k in k0..=k1 {
                let v = step.value(k);
                for &(edge, a, _) in &edges {
                    let along_x = matches!(edge, Edge::Bottom | Edge::Top);
                    if along_x != (coord == Coord::X) {
                        continue;
                    }
                    let (x, y) = if along_x { (v, a.1) } else { (a.0, v) };
                    ticks.push(Tick {
                        coord,
                        value: v,
                        label: step.label(k),
                        edge,
                        x,
                        y,
                    });
                }
            }
        }
        return AxisTicks {
            ticks,
            bottom_title: "x [pixel]".into(),
            left_title: "y [pixel]".into(),
        };
    };

    let eq = sky.equatorial();
    // Sample the region to find the range of each coordinate.
    const G: usize = 24;
    let mut pts = Vec::new();
    for j in 0..=G {
        for i in 0..=G {
            let x = xl + (xr - xl) * i as f64 / G as f64;
            let y = yb + (yt - yb) * j as f64 / G as f64;
            if let Some(p) = sky.pixel_to_sky(x, y) {
                pts.push(p);
            }
        }
    }
    let cx = 0.5 * (xl + xr);
    let cy = 0.5 * (yb + yt);
    let centre = sky
        .pixel_to_sky(cx, cy)
        .or_else(|| pts.first().copied())
        .unwrap_or((0.0, 0.0));
    let mut lon_min = f64::INFINITY;
    let mut lon_max = f64::NEG_INFINITY;
    let mut lat_min = f64::INFINITY;
    let mut lat_max = f64::NEG_INFINITY;
    for &(lon, lat) in &pts {
        let d = wrap180(lon - centre.0);
        lon_min = lon_min.min(d);
        lon_max = lon_max.max(d);
        lat_min = lat_min.min(lat);
        lat_max = lat_max.max(lat);
    }
    if pts.is_empty() {
        return AxisTicks {
            ticks: Vec::new(),
            bottom_title: String::new(),
            left_title: String::new(),
        };
    }
    // Which coordinate runs along the bottom edge: the pairing of coordinates with edges
    // that follows the map best, longitude along x and latitude along y unless latitude
    // changes along the bottom edge and longitude along the left edge more (the products of
    // the changes: on a rotated grid of unequal pixels one coordinate may change most along
    // both edges). Without the left edge on the sky, the coordinate changing most along the
    // bottom.
    let change = |p: (f64, f64), q: (f64, f64)| -> Option<(f64, f64)> {
        let (a, b) = (sky.pixel_to_sky(p.0, p.1)?, sky.pixel_to_sky(q.0, q.1)?);
        let cosd = a.1.to_radians().cos().abs();
        Some((wrap180(b.0 - a.0).abs() * cosd, (b.1 - a.1).abs()))
    };
    let bottom = change((xl + 0.45 * (xr - xl), yb), (xl + 0.55 * (xr - xl), yb));
    let left = change((xl, yb + 0.45 * (yt - yb)), (xl, yb + 0.55 * (yt - yb)));
    let lon_on_bottom = match (bottom, left) {
        (Some((lon_x, lat_x)), Some((lon_y, lat_y))) => lon_x * lat_y >= lat_x * lon_y,
        (Some((lon_x, lat_x)), None) => lon_x >= lat_x,
        _ => true,
    };
    let (lon_kind, lat_kind) = if eq {
        (Kind::Ra, Kind::Dec)
    } else {
        (Kind::Deg, Kind::Deg)
    };
    let (n_lon, n_lat) = if lon_on_bottom {
        (max_bottom, max_left)
    } else {
        (max_left, max_bottom)
    };
    let lon_step = choose_step(lon_kind, true, lon_max - lon_min, n_lon);
    let lat_step = choose_step(lat_kind, false, lat_max - lat_min, n_lat);

    let mut ticks = Vec::new();
    for (coord, step, lo, hi) in [
        (Coord::Lon, lon_step, centre.0 + lon_min, centre.0 + lon_max),
        (Coord::Lat, lat_step, lat_min, lat_max),
    ] {
        let s = step.size();
        let k0 = (lo / s).ceil() as i64;
        let k1 = (hi / s).floor() as i64;
        let on_x_edges = (coord == Coord::Lon) == lon_on_bottom;
        for k in k0..=k1 {
            let mut v = step.value(k);
            if coord == Coord::Lon {
                v = v.rem_euclid(360.0);
            }
            for &(edge, a, b) in &edges {
                if matches!(edge, Edge::Bottom | Edge::Top) != on_x_edges {
                    continue;
                }
                let p = |t: f64| (a.0 + (b.0 - a.0) * t, a.1 + (b.1 - a.1) * t);
                let f = |t: f64| {
                    let (x, y) = p(t);
                    sky.pixel_to_sky(x, y).map(|(lon, lat)| {
                        if coord == Coord::Lon {
                            wrap180(lon - v)
                        } else {
                            lat - v
                        }
                    })
                };
                for t in crossings(&f) {
                    let (x, y) = p(t);
                    ticks.push(Tick {
                        coord,
                        value: v,
                        label: step.label(k),
                        edge,
                        x,
                        y,
                    });
                }
            }
        }
    }
    let (lon_title, lat_title) = if eq {
        ("RA (ICRS)", "Dec (ICRS)")
    } else {
        ("Galactic longitude", "Galactic latitude")
    };
    let (bottom_title, left_title) = if lon_on_bottom {
        (lon_title, lat_title)
    } else {
        (lat_title, lon_title)
    };
    AxisTicks {
        ticks,
        bottom_title: bottom_title.into(),
        left_title: left_title.into(),
    }
}

/// Round values between `lo` and `hi` for a linear scale: about `n` of them, as (value,
/// label) with labels in fixed notation or as m×10^e when the numbers are large or small.
pub fn linear_ticks(lo: f64, hi: f64, n: usize) -> Vec<(f64, String)> {
    if hi <= lo || !lo.is_finite() || !hi.is_finite() {
        return Vec::new();
    }
    let raw = (hi - lo) / n.max(1) as f64;
    let e = raw.log10().floor() as i32;
    let base = 10f64.powi(e);
    let m = [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .find(|&m| m * base >= raw)
        .unwrap_or(10.0);
    let (m, e) = if m == 10.0 {
        (1i64, e + 1)
    } else {
        (m as i64, e)
    };
    let step = m as f64 * 10f64.powi(e);
    let k0 = (lo / step - 1e-9).ceil() as i64;
    let k1 = (hi / step + 1e-9).floor() as i64;
    let big = lo.abs().max(hi.abs());
    let sci = !(1e-2..1e4).contains(&big);
    (k0..=k1)
        .map(|k| {
            let v = (k * m) as f64 * 10f64.powi(e);
            let label = if sci {
                sci_label(k * m, e)
            } else if e >= 0 {
                fixed_label(k * m * 10i64.pow(e as u32), 0, "")
            } else {
                fixed_label(k * m, e, "")
            };
            (v, label)
        })
        .collect()
}

/// n×10^e written as mantissa×10^exponent with the fewest digits.
pub fn sci_label(n: i64, e: i32) -> String {
    if n == 0 {
        return "0".into();
    }
    let sign = if n < 0 { "\u{2212}" } else { "" };
    let mut a = n.unsigned_abs();
    let mut e = e;
    // Normalise to a single leading digit: a = d.ddd × 10^(digits-1).
    let digits = a.to_string().len() as i32;
    let mut frac = String::new();
    let s = a.to_string();
    if digits > 1 {
        let (head, tail) = s.split_at(1);
        let tail = tail.trim_end_matches('0');
        e += digits - 1;
        a = head.parse().unwrap_or(1);
        frac = tail.to_string();
    }
    if frac.is_empty() && a == 1 {
        format!("{sign}10^{{{}}}", minus(e))
    } else if frac.is_empty() {
        format!("{sign}{a}×10^{{{}}}", minus(e))
    } else {
        format!("{sign}{a}.{frac}×10^{{{}}}", minus(e))
    }
}

fn minus(e: i32) -> String {
    if e < 0 {
        format!("\u{2212}{}", -e)
    } else {
        e.to_string()
    }
}

/// Round values for a logarithmic scale between positive `lo` and `hi`: powers of ten, with
/// 2 and 5 times them added when fewer than three decades are shown.
pub fn log_ticks(lo: f64, hi: f64) -> Vec<(f64, String)> {
    if !(lo > 0.0 && hi > lo) {
        return Vec::new();
    }
    let e0 = lo.log10().floor() as i32;
    let e1 = hi.log10().ceil() as i32;
    let mults: &[i64] = if e1 - e0 <= 2 {
        &[1, 2, 5]
    } else if e1 - e0 <= 4 {
        &[1, 3]
    } else {
        &[1]
    };
    let mut out = Vec::new();
    for e in e0..=e1 {
        for &m in mults {
            let v = m as f64 * 10f64.powi(e);
            if v >= lo * (1.0 - 1e-9) && v <= hi * (1.0 + 1e-9) {
                let big = v.abs();
                let label = if (1e-2..1e4).contains(&big) {
                    if e >= 0 {
                        format!("{}", m * 10i64.pow(e as u32))
                    } else {
                        fixed_label(m, e, "")
                    }
                } else {
                    sci_label(m, e)
                };
                out.push((v, label));
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sexagesimal_labels() {
        let ra = Step {
            kind: Kind::Ra,
            units: 100,
            exp: 0,
            wrap: true,
        };
        // 8h54m40s = 133.6667 deg = 320800 deci-seconds = 3208 steps of 10 s.
        assert_eq!(ra.label(3208), "8^{h}54^{m}40^{s}");
        let dec = Step {
            kind: Kind::Dec,
            units: 600,
            exp: 0,
            wrap: false,
        };
        // -6d43m = -403 arcmin = -403 steps of 600 deci-arcseconds.
        assert_eq!(dec.label(-403), "\u{2212}6°43′");
        assert_eq!(dec.label(-1), "\u{2212}0°01′");
        let l = Step {
            kind: Kind::Deg,
            units: 5,
            exp: -2,
            wrap: true,
        };
        assert_eq!(l.label(-2), "359.90°");
        assert_eq!(l.label(7), "0.35°");
    }

    #[test]
    fn scientific_labels() {
        assert_eq!(sci_label(2, 21), "2×10^{21}");
        assert_eq!(sci_label(1, 21), "10^{21}");
        assert_eq!(sci_label(25, 20), "2.5×10^{21}");
        assert_eq!(sci_label(5, -3), "5×10^{\u{2212}3}");
        let t = linear_ticks(0.0, 4.2e21, 4);
        let labels: Vec<&str> = t.iter().map(|(_, l)| l.as_str()).collect();
        assert_eq!(labels, ["0", "2×10^{21}", "4×10^{21}"]);
        let t = linear_ticks(0.0, 12.5, 5);
        let labels: Vec<&str> = t.iter().map(|(_, l)| l.as_str()).collect();
        assert_eq!(labels, ["0", "5", "10"]);
    }
}

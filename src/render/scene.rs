//! A small list of drawing primitives in output-pixel coordinates (origin top left, y down)
//! and its two back ends: an anti-aliased raster through `tiny-skia`, written as PNG with the
//! resolution recorded, and SVG text with the same geometry.
//!
//! Both back ends draw the same items in the same order, so the PNG and the SVG of a figure
//! agree. Output is deterministic: numbers in the SVG are printed with a fixed number of
//! decimals, and nothing depends on time, locale or hash order.

use super::RenderError;
use base64::Engine;
use std::fmt::Write as _;

/// One segment of a path.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Seg {
    M(f64, f64),
    L(f64, f64),
    Q(f64, f64, f64, f64),
    C(f64, f64, f64, f64, f64, f64),
    Z,
}

/// Path geometry: any number of subpaths.
#[derive(Debug, Clone, Default, PartialEq)]
pub(crate) struct PathData(pub Vec<Seg>);

impl PathData {
    pub fn new() -> Self {
        PathData(Vec::new())
    }
    pub fn move_to(&mut self, x: f64, y: f64) {
        self.0.push(Seg::M(x, y));
    }
    pub fn line_to(&mut self, x: f64, y: f64) {
        self.0.push(Seg::L(x, y));
    }
    pub fn close(&mut self) {
        self.0.push(Seg::Z);
    }
    pub fn line(x0: f64, y0: f64, x1: f64, y1: f64) -> Self {
        PathData(vec![Seg::M(x0, y0), Seg::L(x1, y1)])
    }
    pub fn rect(x: f64, y: f64, w: f64, h: f64) -> Self {
        PathData(vec![
            Seg::M(x, y),
            Seg::L(x + w, y),
            Seg::L(x + w, y + h),
            Seg::L(x, y + h),
            Seg::Z,
        ])
    }
    pub fn polygon(pts: &[(f64, f64)]) -> Self {
        let mut p = PathData::new();
        for (i, &(x, y)) in pts.iter().enumerate() {
            if i == 0 {
                p.move_to(x, y)
            } else {
                p.line_to(x, y)
            }
        }
        p.close();
        p
    }
    /// Moves every point by (dx, dy), after turning it a quarter turn counter-clockwise as
    /// seen on the page about the origin when `rotate_ccw` (exactly, with no rounding).
    pub fn placed(&self, dx: f64, dy: f64, rotate_ccw: bool) -> Self {
        self.mapped(|x, y| {
            if rotate_ccw {
                (dx + y, dy - x)
            } else {
                (dx + x, dy + y)
            }
        })
    }

    /// Turns every point about the origin by the turn's angle and moves it to the turn's
    /// place (see [`Turn`]).
    pub fn turned(&self, t: Turn) -> Self {
        let (c, s) = t.cos_sin();
        // Counter-clockwise on the page, whose y axis points down.
        self.mapped(|x, y| (t.x + c * x + s * y, t.y - s * x + c * y))
    }

    fn mapped(&self, t: impl Fn(f64, f64) -> (f64, f64)) -> Self {
        PathData(
            self.0
                .iter()
                .map(|s| match *s {
                    Seg::M(x, y) => {
                        let (a, b) = t(x, y);
                        Seg::M(a, b)
                    }
                    Seg::L(x, y) => {
                        let (a, b) = t(x, y);
                        Seg::L(a, b)
                    }
                    Seg::Q(x1, y1, x, y) => {
                        let (a, b) = t(x1, y1);
                        let (c, d) = t(x, y);
                        Seg::Q(a, b, c, d)
                    }
                    Seg::C(x1, y1, x2, y2, x, y) => {
                        let (a, b) = t(x1, y1);
                        let (c, d) = t(x2, y2);
                        let (e, f) = t(x, y);
                        Seg::C(a, b, c, d, e, f)
                    }
                    Seg::Z => Seg::Z,
                })
                .collect(),
        )
    }
}

/// A turn and a move of a path drawn in its own frame (text written along a line): each point
/// (x, y) of the path is turned by `degrees` counter-clockwise as seen on the page about the
/// frame's origin, which then goes to (`x`, `y`) on the page. The numbers are held rounded to
/// the SVG's two decimals, so that the PNG (which draws the turned points) and the SVG (which
/// writes the path in its frame with this turn as its `transform`) show the same geometry.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Turn {
    pub x: f64,
    pub y: f64,
    pub degrees: f64,
}

impl Turn {
    pub fn new(x: f64, y: f64, degrees: f64) -> Self {
        let r = |v: f64| (v * 100.0).round() / 100.0;
        Turn {
            x: r(x),
            y: r(y),
            degrees: r(degrees),
        }
    }

    /// The cosine and sine of the angle, from the bundled libm so that they are the same
    /// on every platform.
    pub fn cos_sin(self) -> (f64, f64) {
        let a = self.degrees.to_radians();
        (libm::cos(a), libm::sin(a))
    }

    /// The SVG `transform` attribute's value: SVG turns clockwise on the page, hence the sign.
    pub fn svg(self) -> String {
        format!(
            "translate({} {}) rotate({})",
            num(self.x),
            num(self.y),
            num(-self.degrees)
        )
    }
}

/// An sRGB colour with alpha.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Rgba(pub u8, pub u8, pub u8, pub u8);

impl Rgba {
    pub const BLACK: Rgba = Rgba(0, 0, 0, 255);
    pub fn hex(self) -> String {
        format!("#{:02X}{:02X}{:02X}", self.0, self.1, self.2)
    }
}

/// How a line is stroked.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Line {
    pub color: Rgba,
    pub width: f64,
    /// Dash pattern in pixels (on, off, ...); empty for a solid line.
    pub dash: Vec<f64>,
    pub round: bool,
}

impl Line {
    pub fn solid(color: Rgba, width: f64) -> Self {
        Line {
            color,
            width,
            dash: Vec::new(),
            round: false,
        }
    }
}

/// One way of painting a path; a path may be painted several times (a dark casing under a
/// coloured line, a halo under a letter).
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Paint {
    Fill(Rgba),
    Stroke(Line),
}

#[derive(Debug, Clone)]
pub(crate) enum Item {
    /// Opaque RGB pixels placed at whole output pixels.
    Image {
        x: i32,
        y: i32,
        w: u32,
        h: u32,
        rgb: Vec<u8>,
        /// For the vector outputs: the same picture at a coarser resolution of its own
        /// (width, height, RGB), stretched over the same box without smoothing. The map's
        /// own pixels, where each is at least a figure pixel: the exact picture, smaller,
        /// whose pixels a reader zooming in sees at their true edges.
        exact: Option<(u32, u32, Vec<u8>)>,
    },
    Path {
        d: PathData,
        paints: Vec<Paint>,
        /// Clip to the map frame.
        clip: bool,
        /// SVG id (must be unique) and class.
        id: Option<String>,
        class: String,
        /// Readable text for the SVG (`aria-label`), used for text drawn as outlines.
        label: Option<String>,
    },
    /// Paints again the geometry of the earlier path with this id (so all casings can go
    /// under all coloured lines while each outline stays one path element in the SVG).
    Reuse {
        id: String,
        paints: Vec<Paint>,
        clip: bool,
    },
}

/// A figure: its size, resolution, the map frame used for clipping, and the items in order.
pub(crate) struct Scene {
    pub width: u32,
    pub height: u32,
    pub dpi: f64,
    pub clip: Option<(f64, f64, f64, f64)>,
    pub items: Vec<Item>,
    pub title: String,
    /// Map figures: leaves whose peak is inside the frame, and how many of them got no label
    /// (no free place near them).
    pub leaves_to_label: usize,
    pub labels_left_out: usize,
    /// Map figures: the leaf labels' text size in points where it is smaller than the usual
    /// size (a crowded map).
    pub smaller_label_pt: Option<f64>,
    /// Map figures: the ratio of the scales along y and x when they differ.
    pub y_stretch: Option<f64>,
    /// Map figures: the beam's drawn size, the smaller side of its box in figure pixels.
    pub beam_px: Option<f64>,
    /// Map figures: the scale bar was left out, the frame too narrow for it.
    pub scale_bar_left_out: bool,
}

impl Scene {
    pub fn new(width: u32, height: u32, dpi: f64, title: &str) -> Self {
        Scene {
            width,
            height,
            dpi,
            clip: None,
            items: Vec::new(),
            title: title.to_string(),
            leaves_to_label: 0,
            labels_left_out: 0,
            smaller_label_pt: None,
            y_stretch: None,
            beam_px: None,
            scale_bar_left_out: false,
        }
    }

    pub fn path(&mut self, d: PathData, paints: Vec<Paint>, class: &str) {
        self.items.push(Item::Path {
            d,
            paints,
            clip: false,
            id: None,
            class: class.to_string(),
            label: None,
        });
    }

    /// Text drawn as outlines. `ha`: 0 left, 0.5 centre, 1 right aligned at x; `va`: 0 the
    /// baseline at y, 0.5 capitals centred on y, 1 capital tops at y. With `rotate` the text
    /// reads upwards and the alignments apply along the rotated line.
    #[allow(clippy::too_many_arguments)]
    pub fn text(
        &mut self,
        s: &str,
        x: f64,
        y: f64,
        size: f64,
        ha: f64,
        va: f64,
        rotate: bool,
        color: Rgba,
        halo: Option<(Rgba, f64)>,
    ) {
        if s.is_empty() {
            return;
        }
        let sh = super::text::shape(s, size);
        let ox = -ha * sh.width;
        let oy = va * sh.ascent;
        let d = sh.path.placed(ox, oy, false).placed(x, y, rotate);
        let mut paints = Vec::new();
        if let Some((c, w)) = halo {
            paints.push(Paint::Stroke(Line {
                color: c,
                width: w,
                dash: Vec::new(),
                round: true,
            }));
        }
        paints.push(Paint::Fill(color));
        self.items.push(Item::Path {
            d,
            paints,
            clip: false,
            id: None,
            class: "text".to_string(),
            label: Some(super::text::plain(s)),
        });
    }

    /// The geometry of each path with an id, which [`Item::Reuse`] paints again.
    pub fn paths_by_id(&self) -> std::collections::BTreeMap<&str, &PathData> {
        self.items
            .iter()
            .filter_map(|it| match it {
                Item::Path {
                    d, id: Some(id), ..
                } => Some((id.as_str(), d)),
                _ => None,
            })
            .collect()
    }

    /// Rasterises the scene and encodes it as an RGB PNG with its resolution recorded.
    pub fn to_png(&self) -> Result<Vec<u8>, RenderError> {
        use tiny_skia as sk;
        let (fw, fh) = (self.width, self.height);
        let size = sk::IntSize::from_wh(fw, fh)
            .ok_or_else(|| RenderError::Encode("figure size is zero".into()))?;
        // The pixels and the clip mask in buffers whose allocation may fail (with an error
        // that says what to do) rather than end the process; `vec![0; n]` cannot fail.
        #[allow(clippy::slow_vector_initialization)]
        let zeroed = |bytes_per_pixel: usize| -> Result<Vec<u8>, RenderError> {
            let n = (fw as usize)
                .checked_mul(fh as usize)
                .and_then(|n| n.checked_mul(bytes_per_pixel));
            let mut v = Vec::new();
            match n {
                Some(n) if v.try_reserve_exact(n).is_ok() => {
                    v.resize(n, 0);
                    Ok(v)
                }
                _ => Err(RenderError::BadStyle(format!(
                    "a figure of {fw} x {fh} pixels needs more memory than is available; lower --width"
                ))),
            }
        };
        let mut pm = sk::Pixmap::from_vec(zeroed(4)?, size)
            .ok_or_else(|| RenderError::Encode("figure size is too large".into()))?;
        pm.fill(sk::Color::WHITE);
        let mask = match self.clip {
            None => None,
            Some((x, y, w, h)) => sk::Mask::from_vec(zeroed(1)?, size).and_then(|mut m| {
                let r = sk::Rect::from_xywh(x as f32, y as f32, w as f32, h as f32)?;
                let p = sk::PathBuilder::from_rect(r);
                m.fill_path(&p, sk::FillRule::Winding, false, sk::Transform::identity());
                Some(m)
            }),
        };
        let by_id = self.paths_by_id();
        for item in &self.items {
            match item {
                Item::Image {
                    x, y, w, h, rgb, ..
                } => {
                    let mut rgba = Vec::with_capacity((*w as usize) * (*h as usize) * 4);
                    for px in rgb.chunks_exact(3) {
                        rgba.extend_from_slice(&[px[0], px[1], px[2], 255]);
                    }
                    let size = sk::IntSize::from_wh(*w, *h)
                        .ok_or_else(|| RenderError::Encode("empty image".into()))?;
                    let img = sk::Pixmap::from_vec(rgba, size)
                        .ok_or_else(|| RenderError::Encode("bad image buffer".into()))?;
                    pm.draw_pixmap(
                        *x,
                        *y,
                        img.as_ref(),
                        &sk::PixmapPaint::default(),
                        sk::Transform::identity(),
                        None,
                    );
                }
                Item::Path { .. } | Item::Reuse { .. } => {
                    let (d, paints, clip) = match item {
                        Item::Path {
                            d, paints, clip, ..
                        } => (d, paints, clip),
                        Item::Reuse { id, paints, clip } => match by_id.get(id.as_str()) {
                            Some(d) => (*d, paints, clip),
                            None => continue,
                        },
                        Item::Image { .. } => unreachable!("matched above"),
                    };
                    let Some(path) = to_skia(d) else { continue };
                    let m = if *clip { mask.as_ref() } else { None };
                    for p in paints {
                        let mut paint = sk::Paint {
                            anti_alias: true,
                            ..Default::default()
                        };
                        match p {
                            Paint::Fill(c) => {
                                paint.set_color_rgba8(c.0, c.1, c.2, c.3);
                                pm.fill_path(
                                    &path,
                                    &paint,
                                    sk::FillRule::Winding,
                                    sk::Transform::identity(),
                                    m,
                                );
                            }
                            Paint::Stroke(l) => {
                                paint.set_color_rgba8(l.color.0, l.color.1, l.color.2, l.color.3);
                                let mut st = sk::Stroke {
                                    width: l.width as f32,
                                    ..Default::default()
                                };
                                if l.round {
                                    st.line_cap = sk::LineCap::Round;
                                    st.line_join = sk::LineJoin::Round;
                                } else {
                                    st.line_join = sk::LineJoin::Miter;
                                }
                                if !l.dash.is_empty() {
                                    st.dash = sk::StrokeDash::new(
                                        l.dash.iter().map(|&v| v as f32).collect(),
                                        0.0,
                                    );
                                }
                                pm.stroke_path(&path, &paint, &st, sk::Transform::identity(), m);
                            }
                        }
                    }
                }
            }
        }
        // RGBA to RGB in place (the figure is opaque), so no second buffer is needed.
        let mut rgb = pm.take();
        let n = rgb.len() / 4;
        for i in 0..n {
            rgb.copy_within(4 * i..4 * i + 3, 3 * i);
        }
        rgb.truncate(3 * n);
        encode_png(&rgb, self.width, self.height, Some(self.dpi))
    }

    /// Writes the scene as SVG; text is outlines, the raster image is an embedded PNG.
    pub fn to_svg(&self) -> Result<String, RenderError> {
        let mut s = String::new();
        let inch = |px: u32| num(px as f64 / self.dpi);
        let _ = writeln!(
            s,
            "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\" \
             xmlns:xlink=\"http://www.w3.org/1999/xlink\" version=\"1.1\" width=\"{}in\" \
             height=\"{}in\" viewBox=\"0 0 {} {}\">",
            inch(self.width),
            inch(self.height),
            self.width,
            self.height
        );
        let _ = writeln!(s, "<title>{}</title>", xml_escape(&self.title));
        let _ = writeln!(
            s,
            "<rect x=\"0\" y=\"0\" width=\"{}\" height=\"{}\" fill=\"#FFFFFF\"/>",
            self.width, self.height
        );
        if let Some((x, y, w, h)) = self.clip {
            let _ = writeln!(
                s,
                "<defs><clipPath id=\"frame-clip\"><rect x=\"{}\" y=\"{}\" width=\"{}\" \
                 height=\"{}\"/></clipPath></defs>",
                num(x),
                num(y),
                num(w),
                num(h)
            );
        }
        let reused: std::collections::BTreeSet<&str> = self
            .items
            .iter()
            .filter_map(|it| match it {
                Item::Reuse { id, .. } => Some(id.as_str()),
                _ => None,
            })
            .collect();
        let mut auto_id = 0usize;
        for item in &self.items {
            match item {
                Item::Image {
                    x,
                    y,
                    w,
                    h,
                    rgb,
                    exact,
                } => {
                    let (pw, ph, pixels) = vector_pixels(*w, *h, rgb, exact);
                    let png = encode_png(pixels, pw, ph, None)?;
                    let b64 = base64::engine::general_purpose::STANDARD.encode(png);
                    let _ = writeln!(
                        s,
                        "<image x=\"{x}\" y=\"{y}\" width=\"{w}\" height=\"{h}\" \
                         preserveAspectRatio=\"none\" style=\"image-rendering:pixelated\" \
                         xlink:href=\"data:image/png;base64,{b64}\"/>"
                    );
                }
                Item::Path {
                    d,
                    paints,
                    clip,
                    id,
                    class,
                    label,
                } => {
                    let dstr = path_string(d);
                    if dstr.is_empty() {
                        continue;
                    }
                    let clip_attr = if *clip && self.clip.is_some() {
                        " clip-path=\"url(#frame-clip)\""
                    } else {
                        ""
                    };
                    let label_attr = label
                        .as_ref()
                        .map(|l| format!(" aria-label=\"{}\"", xml_escape(l)))
                        .unwrap_or_default();
                    let shared = id.as_deref().is_some_and(|i| reused.contains(i));
                    if paints.len() == 1 && !shared {
                        let id_attr = id
                            .as_ref()
                            .map(|i| format!(" id=\"{}\"", xml_escape(i)))
                            .unwrap_or_default();
                        let _ = writeln!(
                            s,
                            "<path{id_attr} class=\"{class}\"{label_attr}{clip_attr} {} d=\"{dstr}\"/>",
                            paint_attrs(&paints[0])
                        );
                    } else {
                        // One path element holds the geometry; each painting refers to it.
                        let pid = match id {
                            Some(i) => xml_escape(i),
                            None => {
                                auto_id += 1;
                                format!("p{auto_id}")
                            }
                        };
                        let _ = writeln!(
                            s,
                            "<defs><path id=\"{pid}\" class=\"{class}\"{label_attr} d=\"{dstr}\"/></defs>"
                        );
                        for p in paints {
                            let _ = writeln!(
                                s,
                                "<use href=\"#{pid}\" xlink:href=\"#{pid}\"{clip_attr} {}/>",
                                paint_attrs(p)
                            );
                        }
                    }
                }
                Item::Reuse { id, paints, clip } => {
                    let clip_attr = if *clip && self.clip.is_some() {
                        " clip-path=\"url(#frame-clip)\""
                    } else {
                        ""
                    };
                    let pid = xml_escape(id);
                    for p in paints {
                        let _ = writeln!(
                            s,
                            "<use href=\"#{pid}\" xlink:href=\"#{pid}\"{clip_attr} {}/>",
                            paint_attrs(p)
                        );
                    }
                }
            }
        }
        s.push_str("</svg>\n");
        Ok(s)
    }
}

fn paint_attrs(p: &Paint) -> String {
    match p {
        Paint::Fill(c) => {
            let mut a = format!("fill=\"{}\" stroke=\"none\"", c.hex());
            if c.3 != 255 {
                let _ = write!(a, " fill-opacity=\"{}\"", num(c.3 as f64 / 255.0));
            }
            a
        }
        Paint::Stroke(l) => format!("fill=\"none\" {}", stroke_attrs(l)),
    }
}

/// SVG attributes of a stroke: colour, width, opacity, caps and joins, dashes.
pub(crate) fn stroke_attrs(l: &Line) -> String {
    let mut a = format!(
        "stroke=\"{}\" stroke-width=\"{}\"",
        l.color.hex(),
        num(l.width)
    );
    if l.color.3 != 255 {
        let _ = write!(a, " stroke-opacity=\"{}\"", num(l.color.3 as f64 / 255.0));
    }
    if l.round {
        a.push_str(" stroke-linecap=\"round\" stroke-linejoin=\"round\"");
    } else {
        a.push_str(" stroke-linejoin=\"miter\" stroke-miterlimit=\"4\"");
    }
    if !l.dash.is_empty() {
        let d: Vec<String> = l.dash.iter().map(|&v| num(v)).collect();
        let _ = write!(a, " stroke-dasharray=\"{}\"", d.join(" "));
    }
    a
}

/// The pixels an image item shows in the vector outputs (width, height, RGB): its exact ones
/// where it has them (see [`Item::Image`]), else those of the raster.
pub(crate) fn vector_pixels<'a>(
    w: u32,
    h: u32,
    rgb: &'a [u8],
    exact: &'a Option<(u32, u32, Vec<u8>)>,
) -> (u32, u32, &'a [u8]) {
    match exact {
        Some((ew, eh, own)) => (*ew, *eh, own),
        None => (w, h, rgb),
    }
}

/// A number with at most two decimals and no trailing zeros.
pub(crate) fn num(v: f64) -> String {
    let mut s = format!("{:.2}", v);
    if s.contains('.') {
        while s.ends_with('0') {
            s.pop();
        }
        if s.ends_with('.') {
            s.pop();
        }
    }
    if s == "-0" { "0".to_string() } else { s }
}

pub(crate) fn path_string(d: &PathData) -> String {
    let mut s = String::new();
    for seg in &d.0 {
        let _ = match *seg {
            Seg::M(x, y) => write!(s, "M{} {}", num(x), num(y)),
            Seg::L(x, y) => write!(s, "L{} {}", num(x), num(y)),
            Seg::Q(a, b, x, y) => write!(s, "Q{} {} {} {}", num(a), num(b), num(x), num(y)),
            Seg::C(a, b, c, e, x, y) => write!(
                s,
                "C{} {} {} {} {} {}",
                num(a),
                num(b),
                num(c),
                num(e),
                num(x),
                num(y)
            ),
            Seg::Z => write!(s, "Z"),
        };
    }
    s
}

fn to_skia(d: &PathData) -> Option<tiny_skia::Path> {
    let mut pb = tiny_skia::PathBuilder::new();
    for seg in &d.0 {
        match *seg {
            Seg::M(x, y) => pb.move_to(x as f32, y as f32),
            Seg::L(x, y) => pb.line_to(x as f32, y as f32),
            Seg::Q(a, b, x, y) => pb.quad_to(a as f32, b as f32, x as f32, y as f32),
            Seg::C(a, b, c, e, x, y) => {
                pb.cubic_to(a as f32, b as f32, c as f32, e as f32, x as f32, y as f32)
            }
            Seg::Z => pb.close(),
        }
    }
    pb.finish()
}

pub(crate) fn xml_escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Encodes RGB pixels as PNG, recording the resolution when given.
///
/// At DEFLATE level 2: on a 1600 x 1374 overlay of a noisy 3000 x 3000 map it encodes six
/// times faster than the png crate's balanced default (0.058 s against 0.347 s) for a file 7%
/// larger, and the demo map's overlay and tree 4% and 8% larger (BENCHMARKS.md; its fastest
/// setting was faster still but made the tree twice as large).
pub(crate) fn encode_png(
    rgb: &[u8],
    w: u32,
    h: u32,
    dpi: Option<f64>,
) -> Result<Vec<u8>, RenderError> {
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, w, h);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        enc.set_deflate_compression(png::DeflateCompression::Level(2));
        if let Some(dpi) = dpi {
            let ppm = (dpi / 0.0254).round() as u32;
            enc.set_pixel_dims(Some(png::PixelDimensions {
                xppu: ppm,
                yppu: ppm,
                unit: png::Unit::Meter,
            }));
        }
        let mut wr = enc
            .write_header()
            .map_err(|e| RenderError::Encode(e.to_string()))?;
        wr.write_image_data(rgb)
            .map_err(|e| RenderError::Encode(e.to_string()))?;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_turn_keeps_shapes_and_a_quarter_turn_is_the_exact_one() {
        let p = PathData(vec![
            Seg::M(3.0, -4.0),
            Seg::L(10.0, 2.0),
            Seg::Q(1.0, 1.0, -2.0, 5.0),
            Seg::C(0.5, 0.5, 7.0, -1.0, 2.0, 2.0),
            Seg::Z,
        ]);
        let pts = |d: &PathData| -> Vec<(f64, f64)> {
            d.0.iter()
                .flat_map(|s| match *s {
                    Seg::M(x, y) | Seg::L(x, y) => vec![(x, y)],
                    Seg::Q(a, b, x, y) => vec![(a, b), (x, y)],
                    Seg::C(a, b, c, e, x, y) => vec![(a, b), (c, e), (x, y)],
                    Seg::Z => vec![],
                })
                .collect()
        };
        // A quarter turn counter-clockwise on the page is the exact one of `placed`.
        let q = pts(&p.turned(Turn::new(20.0, 30.0, 90.0)));
        let exact = pts(&p.placed(20.0, 30.0, true));
        for (a, b) in q.iter().zip(&exact) {
            assert!((a.0 - b.0).abs() < 1e-12 && (a.1 - b.1).abs() < 1e-12);
        }
        // Any turn keeps distances, and 30 degrees counter-clockwise takes the x axis up and
        // to the right on the page (y down).
        let t = pts(&p.turned(Turn::new(-5.0, 8.0, 30.0)));
        let o = pts(&p);
        for i in 0..o.len() {
            for j in 0..o.len() {
                let d0 = (o[i].0 - o[j].0).hypot(o[i].1 - o[j].1);
                let d1 = (t[i].0 - t[j].0).hypot(t[i].1 - t[j].1);
                assert!((d0 - d1).abs() < 1e-9);
            }
        }
        let x =
            PathData(vec![Seg::M(0.0, 0.0), Seg::L(2.0, 0.0)]).turned(Turn::new(0.0, 0.0, 30.0));
        match x.0[1] {
            Seg::L(a, b) => assert!((a - 3f64.sqrt()).abs() < 1e-12 && (b + 1.0).abs() < 1e-12),
            _ => unreachable!("a line stays a line"),
        }
        // The SVG's transform says the same (SVG turns clockwise on the page).
        assert_eq!(
            Turn::new(12.345, 6.0, 30.004).svg(),
            "translate(12.35 6) rotate(-30)"
        );
    }
}

//! The PDF back end of a figure's [`Scene`]: the same primitives as the PNG and the SVG, written
//! as one PDF page whose size is the print size (`width / dpi` inches), for the journals that
//! take vector figures as PDF (ISO 32000-1:2008, "Document management — Portable document
//! format — Part 1: PDF 1.7").
//!
//! Paths are PDF path operators in the figure's pixel units, placed on the page by one
//! transformation (points per pixel, y turned upwards; ISO 32000-1 sec. 8.3.2.3); text is
//! drawn as glyph outlines, as in the SVG, so no font is embedded and every viewer shows the
//! same letters. The map is an image XObject holding the PNG encoding's own compressed rows:
//! PNG compresses filtered rows with zlib, which is PDF's `FlateDecode` with the PNG predictors
//! (ISO 32000-1 sec. 7.4.4.4, predictor 15: each row names its own filter), so the image data
//! is taken from the PNG's IDAT chunks unchanged (PNG Specification, W3C 2003, sec. 5.3 and
//! 10). Translucent colours go through graphics-state dictionaries (`/CA`, `/ca`; sec. 11.6.4).
//! The output is deterministic: no dates, no random ids, numbers rounded as in the SVG.
//!
//! The writing of PDF objects (cross-reference table, dictionaries, operators) is the
//! `pdf-writer` crate's; the content stream is compressed with `flate2`.

use super::RenderError;
use super::scene::{Item, Line, Paint, PathData, Rgba, Scene, Seg, encode_png, vector_pixels};
use pdf_writer::types::{LineCapStyle, LineJoinStyle, Predictor};
use pdf_writer::{Content, Filter, Finish, Name, Pdf, Rect, Ref, TextStr};

/// PostScript points per inch: the PDF's default user space unit is 1/72 inch
/// (ISO 32000-1 sec. 8.3.2.3).
const POINTS_PER_INCH: f64 = 72.0;

/// The largest side of a page in user space units (ISO 32000-1 Annex C, implementation
/// limits).
const MAX_PAGE_UNITS: f64 = 14_400.0;

/// A coordinate as the figure's other vector output gives it: rounded to two decimals of a
/// figure pixel (the SVG's `num`), so both carry the same geometry.
fn r2(v: f64) -> f32 {
    ((v * 100.0).round() / 100.0) as f32
}

/// The zlib stream of a PNG's image data: its IDAT chunks' contents in order (PNG
/// Specification sec. 5.3: length, type, data, CRC per chunk after the 8-byte signature).
fn png_idat(png: &[u8]) -> Result<Vec<u8>, RenderError> {
    let bad = || RenderError::Encode("the map image's PNG encoding could not be read".into());
    let mut out = Vec::new();
    let mut at = 8usize;
    while at + 12 <= png.len() {
        let len = u32::from_be_bytes(png[at..at + 4].try_into().map_err(|_| bad())?) as usize;
        let kind = &png[at + 4..at + 8];
        let data = png.get(at + 8..at + 8 + len).ok_or_else(bad)?;
        if kind == b"IDAT" {
            out.extend_from_slice(data);
        }
        at += 12 + len;
    }
    if out.is_empty() { Err(bad()) } else { Ok(out) }
}

/// Appends a path's geometry; quadratic segments become the cubic ones of the same curve
/// (PDF has cubic Bézier segments only: control points at 2/3 of the way from each end
/// towards the quadratic's control point).
fn put_path(c: &mut Content, d: &PathData) {
    let (mut cur, mut start) = ((0.0f64, 0.0f64), (0.0f64, 0.0f64));
    for s in &d.0 {
        match *s {
            Seg::M(x, y) => {
                c.move_to(r2(x), r2(y));
                cur = (x, y);
                start = cur;
            }
            Seg::L(x, y) => {
                c.line_to(r2(x), r2(y));
                cur = (x, y);
            }
            Seg::Q(qx, qy, x, y) => {
                let c1 = (
                    cur.0 + 2.0 / 3.0 * (qx - cur.0),
                    cur.1 + 2.0 / 3.0 * (qy - cur.1),
                );
                let c2 = (x + 2.0 / 3.0 * (qx - x), y + 2.0 / 3.0 * (qy - y));
                c.cubic_to(r2(c1.0), r2(c1.1), r2(c2.0), r2(c2.1), r2(x), r2(y));
                cur = (x, y);
            }
            Seg::C(x1, y1, x2, y2, x, y) => {
                c.cubic_to(r2(x1), r2(y1), r2(x2), r2(y2), r2(x), r2(y));
                cur = (x, y);
            }
            Seg::Z => {
                c.close_path();
                cur = start;
            }
        }
    }
}

/// The name of the graphics state that sets opacity `alpha` (of 255) for strokes and fills.
fn alpha_name(alpha: u8) -> String {
    format!("A{alpha}")
}

fn rgb(c: Rgba) -> (f32, f32, f32) {
    (c.0 as f32 / 255.0, c.1 as f32 / 255.0, c.2 as f32 / 255.0)
}

/// Sets a stroke's colour, width, caps, joins and dashes as the SVG's `stroke_attrs` does.
fn put_stroke_style(c: &mut Content, l: &Line) {
    let (r, g, b) = rgb(l.color);
    c.set_stroke_rgb(r, g, b);
    c.set_line_width(r2(l.width));
    if l.round {
        c.set_line_cap(LineCapStyle::RoundCap);
        c.set_line_join(LineJoinStyle::RoundJoin);
    } else {
        c.set_line_cap(LineCapStyle::ButtCap);
        c.set_line_join(LineJoinStyle::MiterJoin);
        c.set_miter_limit(4.0);
    }
    if !l.dash.is_empty() {
        c.set_dash_pattern(l.dash.iter().map(|&v| r2(v)), 0.0);
    }
}

impl Scene {
    /// Writes the scene as a one-page PDF of the figure's print size (see the module's
    /// comment).
    pub fn to_pdf(&self) -> Result<Vec<u8>, RenderError> {
        // A page is at most 14,400 units on a side (ISO 32000-1 Annex C): a figure larger
        // than 200 inches takes a user unit of several points (`/UserUnit`, sec. 14.11.2.1).
        let inches = self.width.max(self.height) as f64 / self.dpi;
        let unit = (inches * POINTS_PER_INCH / MAX_PAGE_UNITS).ceil().max(1.0);
        let scale = POINTS_PER_INCH / self.dpi / unit;
        let (w_pt, h_pt) = (self.width as f64 * scale, self.height as f64 * scale);
        let by_id = self.paths_by_id();
        // Object numbers: catalog, page tree, page, content, information, then the images.
        let (catalog, tree, page_id, content_id, info) = (
            Ref::new(1),
            Ref::new(2),
            Ref::new(3),
            Ref::new(4),
            Ref::new(5),
        );
        let mut next = 6;
        let mut images: Vec<(Ref, &[u8], u32, u32)> = Vec::new();
        // Each image's PNG encoding and its pixels' width and height.
        let mut pngs: Vec<(Vec<u8>, u32, u32)> = Vec::new();
        for item in &self.items {
            if let Item::Image {
                w, h, rgb, exact, ..
            } = item
            {
                let (pw, ph, pixels) = vector_pixels(*w, *h, rgb, exact);
                pngs.push((encode_png(pixels, pw, ph, None)?, pw, ph));
            }
        }
        let mut alphas = std::collections::BTreeSet::new();

        let mut c = Content::new();
        c.save_state();
        // Figure pixels (origin top left, y down) to points (origin bottom left, y up).
        c.transform([scale as f32, 0.0, 0.0, -scale as f32, 0.0, h_pt as f32]);
        c.set_fill_rgb(1.0, 1.0, 1.0);
        c.rect(0.0, 0.0, self.width as f32, self.height as f32);
        c.fill_nonzero();
        let mut image_at = 0usize;
        for item in &self.items {
            let (d, paints, clip) = match item {
                Item::Image { x, y, w, h, .. } => {
                    let id = Ref::new(next);
                    next += 1;
                    let (png, pw, ph) = &pngs[image_at];
                    image_at += 1;
                    images.push((id, png.as_slice(), *pw, *ph));
                    let name = format!("Im{}", images.len());
                    c.save_state();
                    // The image's unit square, its first row at the top, onto its pixels.
                    c.transform([
                        *w as f32,
                        0.0,
                        0.0,
                        -(*h as f32),
                        *x as f32,
                        (*y + *h as i32) as f32,
                    ]);
                    c.x_object(Name(name.as_bytes()));
                    c.restore_state();
                    continue;
                }
                Item::Path {
                    d, paints, clip, ..
                } => (d, paints, *clip),
                Item::Reuse { id, paints, clip } => match by_id.get(id.as_str()) {
                    Some(d) => (*d, paints, *clip),
                    None => continue,
                },
            };
            if d.0.is_empty() {
                continue;
            }
            for p in paints {
                c.save_state();
                if let (true, Some((x, y, w, h))) = (clip, self.clip) {
                    c.rect(r2(x), r2(y), r2(w), r2(h));
                    c.clip_nonzero();
                    c.end_path();
                }
                let alpha = match p {
                    Paint::Fill(col) => col.3,
                    Paint::Stroke(l) => l.color.3,
                };
                if alpha != 255 {
                    alphas.insert(alpha);
                    c.set_parameters(Name(alpha_name(alpha).as_bytes()));
                }
                match p {
                    Paint::Fill(col) => {
                        let (r, g, b) = rgb(*col);
                        c.set_fill_rgb(r, g, b);
                        put_path(&mut c, d);
                        c.fill_nonzero();
                    }
                    Paint::Stroke(l) => {
                        put_stroke_style(&mut c, l);
                        put_path(&mut c, d);
                        c.stroke();
                    }
                }
                c.restore_state();
            }
        }
        c.restore_state();
        let content = deflate(&c.finish())?;

        let mut pdf = Pdf::new();
        pdf.catalog(catalog).pages(tree);
        pdf.pages(tree).kids([page_id]).count(1);
        let mut page = pdf.page(page_id);
        page.media_box(Rect::new(0.0, 0.0, w_pt as f32, h_pt as f32));
        if unit > 1.0 {
            page.user_unit(unit as f32);
        }
        page.parent(tree);
        page.contents(content_id);
        let mut res = page.resources();
        {
            let mut xo = res.x_objects();
            for (i, (id, ..)) in images.iter().enumerate() {
                xo.pair(Name(format!("Im{}", i + 1).as_bytes()), *id);
            }
        }
        {
            let mut gs = res.ext_g_states();
            for &a in &alphas {
                let mut g = gs
                    .insert(Name(alpha_name(a).as_bytes()))
                    .start::<pdf_writer::writers::ExtGraphicsState>();
                g.stroking_alpha(a as f32 / 255.0);
                g.non_stroking_alpha(a as f32 / 255.0);
            }
        }
        res.finish();
        page.finish();
        pdf.stream(content_id, &content).filter(Filter::FlateDecode);
        for (id, png, w, h) in &images {
            let data = png_idat(png)?;
            let mut img = pdf.image_xobject(*id, &data);
            img.filter(Filter::FlateDecode);
            img.width(*w as i32);
            img.height(*h as i32);
            img.color_space().device_rgb();
            img.bits_per_component(8);
            img.decode_parms()
                .predictor(Predictor::PngOptimum)
                .colors(3)
                .bits_per_component(8)
                .columns(*w as i32);
        }
        let mut doc = pdf.document_info(info);
        doc.title(TextStr(&self.title));
        doc.producer(TextStr(concat!("cairn ", env!("CARGO_PKG_VERSION"))));
        doc.finish();
        Ok(pdf.finish())
    }
}

/// The content stream compressed for `FlateDecode` (zlib, ISO 32000-1 sec. 7.4.4).
fn deflate(bytes: &[u8]) -> Result<Vec<u8>, RenderError> {
    use std::io::Write;
    let mut enc = flate2::write::ZlibEncoder::new(Vec::new(), flate2::Compression::new(6));
    enc.write_all(bytes)
        .and_then(|_| enc.finish())
        .map_err(|e| RenderError::Encode(e.to_string()))
}

/// A small fixed figure that uses every primitive of a scene (an image with its own coarser
/// pixels for the vector outputs, a clip, translucent
/// and opaque fills, solid and dashed strokes with round and mitred joins, quadratic and
/// cubic curves, text as outlines with a halo, a reused path), drawn as PNG and as PDF: the
/// PDF back end's outside check renders this PDF with another library and compares it with
/// the PNG (`tests/oracle/render_pdf_pdfium.py`, `tests/render_checks.rs`). It depends on the
/// scene and its back ends only, not on the layout of any figure.
pub fn check_scene() -> Result<(Vec<u8>, Vec<u8>), RenderError> {
    let (w, h) = (240u32, 180u32);
    let mut sc = Scene::new(w, h, 144.0, "cairn PDF check");
    // An image whose colours change along both axes, so a flip or a transposition shows,
    // given at its own 24 x 16 pixels for the vector outputs and as each of them 5 x 5
    // figure pixels for the raster (as a map whose pixels are larger than the figure's).
    let (ew, eh, k) = (24u32, 16u32, 5u32);
    let (iw, ih) = (ew * k, eh * k);
    let colour = |x: u32, y: u32| -> [u8; 3] {
        let corner = x < 3 && y < 3;
        [
            (x * 10) as u8,
            (y * 15) as u8,
            if corner { 255 } else { 96 },
        ]
    };
    let own: Vec<u8> = (0..eh)
        .flat_map(|y| (0..ew).flat_map(move |x| colour(x, y)))
        .collect();
    let rgb: Vec<u8> = (0..ih)
        .flat_map(|y| (0..iw).flat_map(move |x| colour(x / k, y / k)))
        .collect();
    sc.items.push(Item::Image {
        x: 30,
        y: 20,
        w: iw,
        h: ih,
        rgb,
        exact: Some((ew, eh, own)),
    });
    sc.clip = Some((30.0, 20.0, iw as f64, ih as f64));
    // A circle of quadratic segments, half outside the clip, filled translucent.
    let (cx, cy, r) = (140.0, 60.0, 45.0);
    let mut circle = PathData::new();
    circle.move_to(cx + r, cy);
    for k in 1..=8 {
        let (a0, a1) = (
            (k - 1) as f64 * std::f64::consts::FRAC_PI_4,
            k as f64 * std::f64::consts::FRAC_PI_4,
        );
        let mid = 0.5 * (a0 + a1);
        let rc = r / (0.5 * (a1 - a0)).cos();
        circle.0.push(Seg::Q(
            cx + rc * mid.cos(),
            cy + rc * mid.sin(),
            cx + r * a1.cos(),
            cy + r * a1.sin(),
        ));
    }
    circle.close();
    sc.items.push(Item::Path {
        d: circle,
        paints: vec![Paint::Fill(Rgba(213, 94, 0, 140))],
        clip: true,
        id: None,
        class: "check".into(),
        label: None,
    });
    // A dashed polyline with round caps and a mitred zigzag.
    sc.path(
        PathData(vec![
            Seg::M(20.0, 130.0),
            Seg::L(120.0, 110.0),
            Seg::L(220.0, 135.0),
        ]),
        vec![Paint::Stroke(Line {
            color: Rgba(0, 114, 178, 255),
            width: 3.0,
            dash: vec![9.0, 6.0],
            round: true,
        })],
        "check",
    );
    let mut zig = PathData::new();
    zig.move_to(160.0, 100.0);
    for (i, x) in [175.0, 190.0, 205.0, 220.0].into_iter().enumerate() {
        zig.line_to(x, if i % 2 == 0 { 80.0 } else { 100.0 });
    }
    sc.path(
        zig,
        vec![Paint::Stroke(Line::solid(Rgba::BLACK, 4.0))],
        "check",
    );
    // A cubic curve, and a triangle whose geometry a later item paints again.
    let mut s_curve = PathData::new();
    s_curve.move_to(20.0, 170.0);
    s_curve
        .0
        .push(Seg::C(60.0, 120.0, 100.0, 200.0, 140.0, 150.0));
    sc.path(
        s_curve,
        vec![Paint::Stroke(Line::solid(Rgba(0, 158, 115, 255), 2.0))],
        "check",
    );
    sc.items.push(Item::Path {
        d: PathData::polygon(&[(170.0, 120.0), (230.0, 175.0), (160.0, 170.0)]),
        paints: vec![Paint::Fill(Rgba(240, 228, 66, 255))],
        clip: false,
        id: Some("triangle".into()),
        class: "check".into(),
        label: None,
    });
    sc.text(
        "N = 10^{21} cm^{-2}",
        40.0,
        100.0,
        16.0,
        0.0,
        0.0,
        false,
        Rgba::BLACK,
        Some((Rgba(255, 255, 255, 255), 3.0)),
    );
    sc.items.push(Item::Reuse {
        id: "triangle".into(),
        paints: vec![Paint::Stroke(Line::solid(Rgba(204, 121, 167, 255), 2.5))],
        clip: false,
    });
    Ok((sc.to_png()?, sc.to_pdf()?))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The page's size as written: MediaBox width and height, and the user unit (1 if none).
    fn page_size(pdf: &[u8]) -> (f64, f64, f64) {
        let text = String::from_utf8_lossy(pdf);
        let at = text.find("/MediaBox [0 0 ").unwrap() + "/MediaBox [0 0 ".len();
        let v: Vec<f64> = text[at..at + text[at..].find(']').unwrap()]
            .split_whitespace()
            .map(|t| t.parse().unwrap())
            .collect();
        let unit = text.find("/UserUnit ").map_or(1.0, |i| {
            let rest = &text[i + "/UserUnit ".len()..];
            rest[..rest.find(|c: char| c.is_whitespace()).unwrap()]
                .parse()
                .unwrap()
        });
        (v[0], v[1], unit)
    }

    #[test]
    fn pages_beyond_the_size_limit_take_a_larger_user_unit() {
        // ISO 32000-1 Annex C: a page side is at most 14,400 units; the figure's print size
        // (width / dpi inches, 72 points to the inch) is kept through /UserUnit.
        for (w, h, dpi, unit) in [(1600u32, 1000u32, 300.0, 1.0), (15000, 900, 72.0, 2.0)] {
            let mut sc = Scene::new(w, h, dpi, "size check");
            sc.path(
                PathData::line(0.0, 0.0, w as f64, h as f64),
                vec![Paint::Stroke(Line::solid(Rgba::BLACK, 1.0))],
                "check",
            );
            let (pw, ph, u) = page_size(&sc.to_pdf().unwrap());
            assert_eq!(u, unit, "{w} px at {dpi} dpi");
            assert!(pw.max(ph) <= MAX_PAGE_UNITS);
            assert!((pw * u - w as f64 / dpi * 72.0).abs() < 1e-2, "{pw} x {u}");
            assert!((ph * u - h as f64 / dpi * 72.0).abs() < 1e-2, "{ph} x {u}");
        }
    }
}

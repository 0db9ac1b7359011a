//! Text as glyph outlines from the bundled DejaVu Sans font (`assets/fonts/`, Bitstream Vera
//! licence with public-domain DejaVu changes, see `assets/fonts/DejaVuSans-LICENSE.txt`).
//!
//! Every piece of text becomes a filled path, in the PNG and in the SVG alike, so a figure looks
//! the same on every machine and needs no installed font. A tiny markup gives exponents and
//! indices: `^{...}` or `^` followed by a run of digits and signs raises the text (superscript),
//! `_{...}` or `_` followed by digits lowers it (subscript). A `-` inside a superscript is set as
//! a true minus sign.

use super::scene::{PathData, Seg};
use std::sync::OnceLock;
use ttf_parser::{Face, GlyphId, OutlineBuilder};

static FONT_BYTES: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

fn face() -> &'static Face<'static> {
    static FACE: OnceLock<Face<'static>> = OnceLock::new();
    FACE.get_or_init(|| Face::parse(FONT_BYTES, 0).expect("the bundled font parses"))
}

/// Position of a run of text relative to the baseline.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Shift {
    Normal,
    Sup,
    Sub,
}

/// Splits marked-up text into runs of normal, raised and lowered text.
fn parse_markup(s: &str) -> Vec<(String, Shift)> {
    let chars: Vec<char> = s.chars().collect();
    let mut runs: Vec<(String, Shift)> = Vec::new();
    let mut cur = String::new();
    let mut i = 0;
    let flush = |cur: &mut String, runs: &mut Vec<(String, Shift)>| {
        if !cur.is_empty() {
            runs.push((std::mem::take(cur), Shift::Normal));
        }
    };
    while i < chars.len() {
        let c = chars[i];
        if (c == '^' || c == '_') && i + 1 < chars.len() {
            let shift = if c == '^' { Shift::Sup } else { Shift::Sub };
            if chars[i + 1] == '{' {
                if let Some(end) = chars[i + 2..].iter().position(|&c| c == '}') {
                    flush(&mut cur, &mut runs);
                    let inner: String = chars[i + 2..i + 2 + end].iter().collect();
                    runs.push((fix_minus(&inner, shift), shift));
                    i += end + 3;
                    continue;
                }
            } else {
                let is_tok = |c: char| c.is_ascii_digit() || c == '-' || c == '+' || c == '−';
                let mut j = i + 1;
                while j < chars.len() && is_tok(chars[j]) {
                    j += 1;
                }
                if j > i + 1 && chars[i + 1..j].iter().any(|c| c.is_ascii_digit()) {
                    flush(&mut cur, &mut runs);
                    let inner: String = chars[i + 1..j].iter().collect();
                    runs.push((fix_minus(&inner, shift), shift));
                    i = j;
                    continue;
                }
            }
        }
        cur.push(c);
        i += 1;
    }
    flush(&mut cur, &mut runs);
    runs
}

fn fix_minus(s: &str, shift: Shift) -> String {
    if shift == Shift::Sup {
        s.replace('-', "\u{2212}")
    } else {
        s.to_string()
    }
}

/// The text without markup (for accessible labels and titles).
pub fn plain(s: &str) -> String {
    parse_markup(s).into_iter().map(|(t, _)| t).collect()
}

/// A shaped piece of text: glyph outlines with the origin on the baseline at the left end,
/// y growing downwards, in output pixels.
pub(crate) struct Shaped {
    pub path: PathData,
    pub width: f64,
    /// Height above the baseline of capital letters.
    pub ascent: f64,
}

struct Collect<'a> {
    out: &'a mut Vec<Seg>,
    x0: f64,
    y0: f64,
    k: f64,
}

impl Collect<'_> {
    fn p(&self, x: f32, y: f32) -> (f64, f64) {
        (self.x0 + x as f64 * self.k, self.y0 - y as f64 * self.k)
    }
}

impl OutlineBuilder for Collect<'_> {
    fn move_to(&mut self, x: f32, y: f32) {
        let (a, b) = self.p(x, y);
        self.out.push(Seg::M(a, b));
    }
    fn line_to(&mut self, x: f32, y: f32) {
        let (a, b) = self.p(x, y);
        self.out.push(Seg::L(a, b));
    }
    fn quad_to(&mut self, x1: f32, y1: f32, x: f32, y: f32) {
        let (a, b) = self.p(x1, y1);
        let (c, d) = self.p(x, y);
        self.out.push(Seg::Q(a, b, c, d));
    }
    fn curve_to(&mut self, x1: f32, y1: f32, x2: f32, y2: f32, x: f32, y: f32) {
        let (a, b) = self.p(x1, y1);
        let (c, d) = self.p(x2, y2);
        let (e, f) = self.p(x, y);
        self.out.push(Seg::C(a, b, c, d, e, f));
    }
    fn close(&mut self) {
        self.out.push(Seg::Z);
    }
}

/// Lays out marked-up text at `size` pixels per em.
pub(crate) fn shape(text: &str, size: f64) -> Shaped {
    let f = face();
    let upem = f.units_per_em() as f64;
    let mut segs = Vec::new();
    let mut pen = 0.0;
    for (run, shift) in parse_markup(text) {
        let (scale, rise) = match shift {
            Shift::Normal => (1.0, 0.0),
            Shift::Sup => (0.7, 0.4),
            Shift::Sub => (0.7, -0.16),
        };
        let k = size * scale / upem;
        for c in run.chars() {
            let gid = f.glyph_index(c).unwrap_or(GlyphId(0));
            let mut col = Collect {
                out: &mut segs,
                x0: pen,
                y0: -rise * size,
                k,
            };
            f.outline_glyph(gid, &mut col);
            pen += f.glyph_hor_advance(gid).unwrap_or(0) as f64 * k;
        }
    }
    let cap = f.capital_height().unwrap_or(1493) as f64 / upem * size;
    Shaped {
        path: PathData(segs),
        width: pen,
        ascent: cap,
    }
}

/// Width in pixels of marked-up text at `size` pixels per em.
pub(crate) fn width(text: &str, size: f64) -> f64 {
    let f = face();
    let upem = f.units_per_em() as f64;
    let mut pen = 0.0;
    for (run, shift) in parse_markup(text) {
        let scale = if shift == Shift::Normal { 1.0 } else { 0.7 };
        for c in run.chars() {
            let gid = f.glyph_index(c).unwrap_or(GlyphId(0));
            pen += f.glyph_hor_advance(gid).unwrap_or(0) as f64 * size * scale / upem;
        }
    }
    pen
}

/// How far the ink of marked-up text at `size` pixels per em reaches above and below the
/// baseline (both positive when above and below; from the outlines' points, which hold the
/// curves), so that exponents and descenders are counted.
pub(crate) fn ink_above_below(text: &str, size: f64) -> (f64, f64) {
    use super::scene::Seg;
    let sh = shape(text, size);
    let (mut top, mut bottom) = (0.0f64, 0.0f64);
    for s in &sh.path.0 {
        let ys = match *s {
            Seg::M(_, y) | Seg::L(_, y) => [y, y, y],
            Seg::Q(_, a, _, b) => [a, b, b],
            Seg::C(_, a, _, b, _, c) => [a, b, c],
            Seg::Z => [0.0; 3],
        };
        for y in ys {
            top = top.max(-y);
            bottom = bottom.max(y);
        }
    }
    (top, bottom)
}

/// The box holding every point of the outlines of marked-up text at `size` pixels per em:
/// left, top, right, bottom, from the origin on the baseline at the left end (y down).
pub(crate) fn ink_bounds(text: &str, size: f64) -> (f64, f64, f64, f64) {
    use super::scene::Seg;
    let sh = shape(text, size);
    let mut b = (
        f64::INFINITY,
        f64::INFINITY,
        f64::NEG_INFINITY,
        f64::NEG_INFINITY,
    );
    let mut add = |x: f64, y: f64| b = (b.0.min(x), b.1.min(y), b.2.max(x), b.3.max(y));
    for s in &sh.path.0 {
        match *s {
            Seg::M(x, y) | Seg::L(x, y) => add(x, y),
            Seg::Q(a, b1, c, d) => {
                add(a, b1);
                add(c, d);
            }
            Seg::C(a, b1, c, d, e, f) => {
                add(a, b1);
                add(c, d);
                add(e, f);
            }
            Seg::Z => {}
        }
    }
    if b.0 > b.2 { (0.0, 0.0, 0.0, 0.0) } else { b }
}

/// Height of capital letters at `size` pixels per em.
pub(crate) fn cap_height(size: f64) -> f64 {
    let f = face();
    f.capital_height().unwrap_or(1493) as f64 / f.units_per_em() as f64 * size
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markup_splits_exponents_and_indices() {
        let runs = parse_markup("N(H_2) [cm^-2] 2×10^{21}");
        let texts: Vec<&str> = runs.iter().map(|(t, _)| t.as_str()).collect();
        assert_eq!(texts, ["N(H", "2", ") [cm", "\u{2212}2", "] 2×10", "21"]);
        assert_eq!(runs[1].1, Shift::Sub);
        assert_eq!(runs[3].1, Shift::Sup);
        assert_eq!(plain("a^{b}c"), "abc");
        // A caret not followed by digits stays literal.
        assert_eq!(plain("x^y"), "x^y");
    }

    #[test]
    fn every_character_used_by_labels_has_a_glyph() {
        for c in "0123456789−+-.,:;()[]°′″×/ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyzα≤"
            .chars()
        {
            assert!(face().glyph_index(c).is_some(), "no glyph for {c:?}");
        }
        let s = shape("Ab", 20.0);
        assert!(s.width > 10.0 && s.width < 40.0);
        assert!(!s.path.0.is_empty());
        assert!((width("Ab", 20.0) - s.width).abs() < 1e-9);
    }
}

//! The legend of states shared by the map figure and the tree diagram: each entry a short line
//! sample in the state's colour and line style (over a dark casing) and its words, laid out in
//! rows that wrap at the available width. Only the states some structure of the figure has are
//! listed; the map figure adds the branch outlines' entry when it draws them.

use super::scene::{Line, Paint, PathData, Rgba, Scene};
use super::text;
use super::{StateLegend, state_colour, state_dash};

/// Length of a legend line sample, in font sizes.
pub(crate) const SAMPLE_FS: f64 = 2.6;

/// The words of a legend entry: "name: description", or the name alone.
pub(crate) fn label(st: &StateLegend) -> String {
    if st.description.is_empty() {
        st.name.clone()
    } else {
        format!("{}: {}", st.name, st.description)
    }
}

/// What a legend entry stands for: a state (its index, which gives its colour and line
/// style), or the thin outlines of branches.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Key {
    State(usize),
    Branch,
}

/// The words of the branch outlines' entry.
pub(crate) const BRANCH_WORDS: &str = "branch: outline of a top-level structure with children";

/// The legend's entries: the states whose `shown` flag is set (a state beyond `shown` is not
/// listed), in their order, then the branch outlines' entry when `branches` is set.
pub(crate) fn keys(states: &[StateLegend], shown: &[bool], branches: bool) -> Vec<(Key, String)> {
    let mut out: Vec<(Key, String)> = states
        .iter()
        .enumerate()
        .filter(|(i, _)| shown.get(*i).copied().unwrap_or(false))
        .map(|(i, st)| (Key::State(i), label(st)))
        .collect();
    if branches {
        out.push((Key::Branch, BRANCH_WORDS.to_string()));
    }
    out
}

/// One piece of a legend row: what it stands for, its x offset from the row's start, its words,
/// and whether the line sample is drawn before them (false on the continued lines of an entry
/// too long for one line).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Entry {
    pub state: Key,
    pub x: f64,
    pub text: String,
    pub sample: bool,
}

/// Entries in rows that wrap at the available width `avail`. An entry too long for a row of
/// its own has its words wrapped onto further rows, indented under its first word.
pub(crate) fn rows(keys: &[(Key, String)], fs: f64, gap: f64, avail: f64) -> Vec<Vec<Entry>> {
    let sample = SAMPLE_FS * fs;
    let mut rows: Vec<Vec<Entry>> = Vec::new();
    let mut x = 0.0;
    for (i, words) in keys.iter().cloned() {
        let ew = sample + gap + text::width(&words, fs);
        if rows.is_empty() || (x > 0.0 && x + ew > avail) {
            rows.push(Vec::new());
            x = 0.0;
        }
        if ew <= avail {
            rows.last_mut().expect("a row exists").push(Entry {
                state: i,
                x,
                text: words,
                sample: true,
            });
            x += ew + 1.5 * fs;
            continue;
        }
        // Alone on its row and still too long: as many words per line as fit (at least one).
        let room = avail - sample - gap;
        let mut lines: Vec<String> = Vec::new();
        for w in words.split(' ') {
            match lines.last_mut() {
                Some(l) if text::width(&format!("{l} {w}"), fs) <= room => {
                    l.push(' ');
                    l.push_str(w);
                }
                _ => lines.push(w.to_string()),
            }
        }
        for (k, l) in lines.into_iter().enumerate() {
            if k > 0 {
                rows.push(Vec::new());
            }
            rows.last_mut().expect("a row exists").push(Entry {
                state: i,
                x: 0.0,
                text: l,
                sample: k == 0,
            });
        }
        // The next entry starts a new row.
        x = avail;
    }
    rows
}

/// Line widths of the legend samples.
pub(crate) struct SampleLines {
    /// The coloured line.
    pub width: f64,
    /// The dark casing under it.
    pub casing: f64,
    /// A point in output pixels (the branch outline's widths are in points).
    pub pt: f64,
}

/// How a branch outline is drawn, `pt` output pixels to the point: a thin white line over a
/// faint dark casing.
pub(crate) fn branch_paints(pt: f64) -> Vec<Paint> {
    vec![
        Paint::Stroke(Line::solid(Rgba(0, 0, 0, 110), 1.0 * pt)),
        Paint::Stroke(Line::solid(Rgba(255, 255, 255, 230), 0.45 * pt)),
    ]
}

/// Draws the legend rows with their first row's centre 0.75 font sizes below `top`.
#[allow(clippy::too_many_arguments)]
pub(crate) fn draw(
    sc: &mut Scene,
    rows: &[Vec<Entry>],
    left: f64,
    top: f64,
    fs: f64,
    gap: f64,
    lines: &SampleLines,
) {
    draw_with(sc, rows, left, top, fs, gap, lines, &|i, _| {
        state_dash(i, lines.width)
    });
}

/// [`draw`] with the states' samples dashed by `dash` (state index and the sample's length to
/// a dash pattern), for a figure whose lines use their own patterns.
#[allow(clippy::too_many_arguments)]
pub(crate) fn draw_with(
    sc: &mut Scene,
    rows: &[Vec<Entry>],
    left: f64,
    top: f64,
    fs: f64,
    gap: f64,
    lines: &SampleLines,
    dash: &dyn Fn(usize, f64) -> Vec<f64>,
) {
    let sample = SAMPLE_FS * fs;
    for (r, row) in rows.iter().enumerate() {
        let yc = top + (r as f64 + 0.5) * 1.5 * fs;
        for e in row {
            let x = left + e.x;
            let line = PathData::line(x + 0.2 * fs, yc, x + sample - 0.2 * fs, yc);
            match e.state {
                Key::State(i) if e.sample => {
                    let dash = dash(i, sample - 0.4 * fs);
                    sc.path(
                        line,
                        vec![
                            Paint::Stroke(Line {
                                color: Rgba(0, 0, 0, 200),
                                width: lines.casing,
                                dash: dash.clone(),
                                round: true,
                            }),
                            Paint::Stroke(Line {
                                color: state_colour(i),
                                width: lines.width,
                                dash,
                                round: true,
                            }),
                        ],
                        "legend-sample",
                    );
                }
                Key::Branch if e.sample => {
                    sc.path(line, branch_paints(lines.pt), "legend-sample branch");
                }
                _ => {}
            }
            sc.text(
                &e.text,
                x + sample + gap,
                yc,
                fs,
                0.0,
                0.5,
                false,
                Rgba::BLACK,
                None,
            );
        }
    }
}

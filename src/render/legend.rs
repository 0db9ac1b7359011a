//! The legend of states shared by the map figure and the tree diagram: each entry a short line
//! sample in the state's colour and line style (over a dark casing) and its words, laid out in
//! rows that wrap at the available width.

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

/// One piece of a legend row: the state's index, its x offset from the row's start, its words,
/// and whether the line sample is drawn before them (false on the continued lines of an entry
/// too long for one line).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Entry {
    pub state: usize,
    pub x: f64,
    pub text: String,
    pub sample: bool,
}

/// Entries in rows that wrap at the available width `avail`. An entry too long for a row of
/// its own has its words wrapped onto further rows, indented under its first word.
pub(crate) fn rows(states: &[StateLegend], fs: f64, gap: f64, avail: f64) -> Vec<Vec<Entry>> {
    let sample = SAMPLE_FS * fs;
    let mut rows: Vec<Vec<Entry>> = Vec::new();
    let mut x = 0.0;
    for (i, st) in states.iter().enumerate() {
        let words = label(st);
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
    let sample = SAMPLE_FS * fs;
    for (r, row) in rows.iter().enumerate() {
        let yc = top + (r as f64 + 0.5) * 1.5 * fs;
        for e in row {
            let (i, x) = (e.state, left + e.x);
            if e.sample {
                let dash = state_dash(i, lines.width);
                sc.path(
                    PathData::line(x + 0.2 * fs, yc, x + sample - 0.2 * fs, yc),
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

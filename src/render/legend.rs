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

/// Entries in rows: for each row, (state index, x offset from the row's start).
pub(crate) fn rows(
    states: &[StateLegend],
    fs: f64,
    gap: f64,
    avail: f64,
) -> Vec<Vec<(usize, f64)>> {
    let sample = SAMPLE_FS * fs;
    let mut rows: Vec<Vec<(usize, f64)>> = Vec::new();
    let mut x = 0.0;
    for (i, st) in states.iter().enumerate() {
        let ew = sample + gap + text::width(&label(st), fs);
        if rows.is_empty() || (x > 0.0 && x + ew > avail) {
            rows.push(Vec::new());
            x = 0.0;
        }
        rows.last_mut().expect("a row exists").push((i, x));
        x += ew + 1.5 * fs;
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
    states: &[StateLegend],
    rows: &[Vec<(usize, f64)>],
    left: f64,
    top: f64,
    fs: f64,
    gap: f64,
    lines: &SampleLines,
) {
    let sample = SAMPLE_FS * fs;
    for (r, row) in rows.iter().enumerate() {
        let yc = top + (r as f64 + 0.5) * 1.5 * fs;
        for &(i, x) in row {
            let x = left + x;
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
            sc.text(
                &label(&states[i]),
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

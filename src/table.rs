//! Tables with units: the catalogue's in-memory form and its writers.
//!
//! Owns the table of named, unit-carrying columns and its three file forms:
//! * CSV (RFC 4180) preceded by `#` comment lines giving the run's parameters and each
//!   column's unit and meaning;
//! * a FITS binary table (FITS Standard 4.0, section 7.3) with `TUNITn` per column and the
//!   run's parameters as header keywords, written through CFITSIO;
//! * VOTable 1.4 (IVOA Recommendation, 2019) with the same units and descriptions.
//!
//! Numbers are written in their shortest round-trip form, so files are byte-identical for
//! identical values; NaN is written as an empty CSV field, NaN in FITS and VOTable.

use std::fmt::Write as _;
use std::path::Path;

use crate::error::{Error, Result};

/// The values of one column.
#[derive(Debug, Clone, PartialEq)]
pub enum Values {
    /// Real numbers.
    F64(Vec<f64>),
    /// Integers.
    I64(Vec<i64>),
    /// Text.
    Text(Vec<String>),
    /// Logical flags.
    Bool(Vec<bool>),
}

impl Values {
    fn len(&self) -> usize {
        match self {
            Values::F64(v) => v.len(),
            Values::I64(v) => v.len(),
            Values::Text(v) => v.len(),
            Values::Bool(v) => v.len(),
        }
    }
}

/// One column: name, unit (FITS unit string, empty for none), meaning, values.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// Column name.
    pub name: String,
    /// Unit, as a FITS unit string (`deg`, `arcsec`, `pc`, `solMass`, `cm-2`); empty if none.
    pub unit: String,
    /// What the column holds, one short sentence.
    pub description: String,
    /// The values, one per row.
    pub values: Values,
}

/// The value of a table parameter, typed: the FITS keyword's and the VOTable PARAM's type
/// follow it, so that a parameter keeps its type from run to run whatever its value.
#[derive(Debug, Clone, PartialEq)]
pub enum ParamValue {
    /// A whole number (a FITS integer keyword, a VOTable `long`).
    Int(i64),
    /// A real number (a FITS real keyword with the CSV's digits, a VOTable `double`); NaN is
    /// written as an undefined FITS value (FITS Standard 4.0 sec. 4.1.2.3), an empty CSV
    /// value and `NaN` in the VOTable.
    Float(f64),
    /// Text (a FITS string keyword, a VOTable `char` array), even when it reads as a number
    /// (a file named 2024, a version).
    Text(String),
}

impl ParamValue {
    /// The value as the CSV and the VOTable give it (numbers in their shortest round-trip
    /// form, [`fmt_f64`]).
    pub fn text(&self) -> String {
        match self {
            ParamValue::Int(n) => n.to_string(),
            ParamValue::Float(x) => fmt_f64(*x),
            ParamValue::Text(t) => t.clone(),
        }
    }
}

/// One parameter of a table (a setting or an assumption of the run that made it): a header
/// line of the CSV, a keyword of the FITS table, a `PARAM` of the VOTable.
#[derive(Debug, Clone, PartialEq)]
pub struct Param {
    /// The name in the CSV and the VOTable, such as `input_sha256`.
    pub name: String,
    /// The FITS keyword: at most 8 characters of `A-Z`, `0-9`, `-` and `_` (FITS Standard
    /// 4.0 sec. 4.1.2.1), such as `SHA256`; the name stands in its comment when they differ.
    pub key: String,
    /// The value.
    pub value: ParamValue,
    /// The unit of a number, as a FITS unit string that is also a valid VOUnit (`pc`, `K`,
    /// `cm-2`); empty for none.
    pub unit: String,
    /// What it is, one short phrase.
    pub description: String,
}

impl Param {
    /// A parameter whose FITS keyword is its name in upper case (cut to 8 characters, and
    /// any character a keyword cannot hold as `_`; give a keyword of its own with
    /// [`Param::with_key`] where that reads badly).
    pub fn new(name: &str, value: ParamValue, unit: &str, description: &str) -> Param {
        let key: String = name
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                    c.to_ascii_uppercase()
                } else {
                    '_'
                }
            })
            .take(8)
            .collect();
        Param {
            name: name.into(),
            key,
            value,
            unit: unit.into(),
            description: description.into(),
        }
    }

    /// The same parameter under FITS keyword `key`.
    pub fn with_key(mut self, key: &str) -> Param {
        self.key = key.into();
        self
    }

    /// The comment of its CSV line: `[unit] description` (the FITS convention for a unit in a
    /// keyword's comment, FITS Standard 4.0 sec. 4.3.2), or the description alone.
    pub fn comment(&self) -> String {
        if self.unit.is_empty() {
            self.description.clone()
        } else if self.description.is_empty() {
            format!("[{}]", self.unit)
        } else {
            format!("[{}] {}", self.unit, self.description)
        }
    }

    /// The start of [`Param::fits_comment`]: the unit and, when the keyword is not the name
    /// in upper case, the name (`[K] temperature`), for a card too short for the rest.
    pub fn comment_head(&self) -> String {
        let name = if self.key == self.name.to_ascii_uppercase() {
            String::new()
        } else {
            self.name.clone()
        };
        match (self.unit.is_empty(), name.is_empty()) {
            (true, _) => name,
            (false, true) => format!("[{}]", self.unit),
            (false, false) => format!("[{}] {name}", self.unit),
        }
    }

    /// The comment of its FITS keyword: [`Param::comment`], with the name first when the
    /// keyword is not the name in upper case (`[K] temperature: dust temperature`).
    pub fn fits_comment(&self) -> String {
        if self.key == self.name.to_ascii_uppercase() {
            return self.comment();
        }
        let unit = if self.unit.is_empty() {
            String::new()
        } else {
            format!("[{}] ", self.unit)
        };
        if self.description.is_empty() {
            format!("{unit}{}", self.name)
        } else {
            format!("{unit}{}: {}", self.name, self.description)
        }
    }
}

/// A table with metadata (the run's parameters).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Table {
    /// Name of the table (EXTNAME in FITS).
    pub name: String,
    /// Columns, all of the same length.
    pub columns: Vec<Column>,
    /// The run's parameters.
    pub meta: Vec<Param>,
    /// Free text lines for the CSV header (criteria, cautions).
    pub notes: Vec<String>,
    /// VOTable coordinate systems: (ID, system, equinox), such as ("map_frame", "eq_FK5", "J2000").
    pub coosys: Vec<(String, String, Option<String>)>,
    /// VOTable field annotations: (column name, UCD, ID of a coordinate system or "").
    pub ucds: Vec<(String, String, String)>,
}

/// CFITSIO's writers of a double-valued keyword (`ffpkyg`, `ffpkyd`).
type PutDouble = unsafe extern "C" fn(
    *mut fitsio::sys::fitsfile,
    *const std::ffi::c_char,
    f64,
    std::ffi::c_int,
    *const std::ffi::c_char,
    *mut std::ffi::c_int,
) -> std::ffi::c_int;

/// A float in its shortest round-trip form ("" for NaN in CSV).
pub fn fmt_f64(x: f64) -> String {
    // Rust's `{:?}` layout: 1e21 as "1e21" and 0.1 as "0.1"; both parse everywhere.
    let mut s = String::new();
    push_f64(&mut s, x);
    s
}

/// Appends [`fmt_f64`] of `x` to `s` without an intermediate string.
///
/// The shortest round-trip digits come from `zmij`, laid out exactly as Rust's `{:?}` does
/// (most numbers need only their exponent's `+` dropped; the whole is about 1.8 times faster
/// than the standard library's formatting on catalogue-like values): plain
/// decimals with at least one fractional digit for `1e-4 <= |x| < 1e16`, otherwise
/// `d.ddde[-]N` (a unit test checks the equality on a million random values).
pub fn push_f64(s: &mut String, x: f64) {
    if x.is_nan() {
        return;
    }
    if x.is_infinite() {
        s.push_str(if x > 0.0 { "inf" } else { "-inf" });
        return;
    }
    if x == 0.0 {
        s.push_str(if x.is_sign_negative() { "-0.0" } else { "0.0" });
        return;
    }
    let mut buf = zmij::Buffer::new();
    let abs = x.abs();
    let text = buf.format_finite(abs);
    // Most numbers need no layout: `zmij` and Rust share the shortest digits unless the value
    // has a short exact decimal form (where a tie can round differently; see below), and
    // where both write a plain decimal, or both an exponent, the texts differ at most by
    // the exponent's `+`.
    if exact_digits(abs).is_none() {
        let plain = (1e-4..1e16).contains(&abs);
        // An exponent takes at most five bytes at the end ("e-308"), so only those are searched.
        let tail = text.len().saturating_sub(5);
        match text.as_bytes()[tail..]
            .iter()
            .position(|&c| c == b'e')
            .map(|i| tail + i)
        {
            None if plain => {
                if x < 0.0 {
                    s.push('-');
                }
                s.push_str(text);
                return;
            }
            Some(i) if !plain => {
                if x < 0.0 {
                    s.push('-');
                }
                s.push_str(&text[..i]);
                s.push('e');
                s.push_str(text[i + 1..].trim_start_matches('+'));
                return;
            }
            _ => {}
        }
    }
    let text = text.as_bytes();
    // Significant digits and the decimal exponent of the first one: x = d0.d1d2... * 10^e.
    let mut digits = [0u8; 24];
    let mut n = 0;
    let mut before_point = 0i32;
    let mut seen_point = false;
    let mut exp = 0i32;
    let mut i = 0;
    while i < text.len() {
        match text[i] {
            b'.' => seen_point = true,
            b'e' | b'E' => {
                let mut neg = false;
                for &c in &text[i + 1..] {
                    match c {
                        b'-' => neg = true,
                        b'+' => {}
                        c => exp = exp * 10 + (c - b'0') as i32,
                    }
                }
                if neg {
                    exp = -exp;
                }
                break;
            }
            c => {
                if !seen_point {
                    before_point += 1;
                }
                if n == 0 && c == b'0' {
                    // A leading zero: one place less before the point.
                    before_point -= 1;
                } else {
                    digits[n] = c;
                    n += 1;
                }
            }
        }
        i += 1;
    }
    while n > 1 && digits[n - 1] == b'0' {
        n -= 1;
    }
    let mut e = before_point + exp - 1;
    // Where x lies exactly halfway between two shortest candidates, `zmij` rounds the last
    // digit to even and Rust rounds it up: take Rust's.
    if let Some((exact, exact_len)) = exact_digits(x.abs())
        && exact_len == n + 1
    {
        let mut up = exact / 10 + u128::from(exact % 10 >= 5);
        if up >= 10u128.pow(n as u32) {
            e += 1;
        }
        while up % 10 == 0 && up > 9 {
            up /= 10;
        }
        n = up.ilog10() as usize + 1;
        for k in (0..n).rev() {
            digits[k] = b'0' + (up % 10) as u8;
            up /= 10;
        }
    }
    let d = &digits[..n];
    let mut out = [0u8; 48];
    let mut o = 0;
    let mut put = |b: u8| {
        out[o] = b;
        o += 1;
    };
    if x < 0.0 {
        put(b'-');
    }
    if !(1e-4..1e16).contains(&abs) {
        put(d[0]);
        if n > 1 {
            put(b'.');
            d[1..].iter().for_each(|&c| put(c));
        }
        put(b'e');
        if e < 0 {
            put(b'-');
        }
        let ea = e.unsigned_abs();
        if ea >= 100 {
            put(b'0' + (ea / 100) as u8);
        }
        if ea >= 10 {
            put(b'0' + (ea / 10 % 10) as u8);
        }
        put(b'0' + (ea % 10) as u8);
    } else if e >= 0 {
        let whole = e as usize + 1;
        for k in 0..whole {
            put(d.get(k).copied().unwrap_or(b'0'));
        }
        put(b'.');
        if n > whole {
            d[whole..].iter().for_each(|&c| put(c));
        } else {
            put(b'0');
        }
    } else {
        put(b'0');
        put(b'.');
        (0..(-e - 1)).for_each(|_| put(b'0'));
        d.iter().for_each(|&c| put(c));
    }
    // Only ASCII digits, signs, '.' and 'e' were written.
    s.push_str(std::str::from_utf8(&out[..o]).unwrap_or_default());
}

/// The exact decimal significand of a positive finite `x` and its number of digits, when it
/// has at most 18 significant digits (`x = E * 10^t` with `E < 10^18`, no trailing zero);
/// `None` otherwise. Only such values can lie halfway between two shortest candidates.
fn exact_digits(x: f64) -> Option<(u128, usize)> {
    const LIMIT: u128 = 1_000_000_000_000_000_000;
    let bits = x.to_bits();
    let exp = ((bits >> 52) & 0x7ff) as i32;
    let frac = bits & ((1u64 << 52) - 1);
    let (mut m, mut q) = if exp == 0 {
        (frac, -1074)
    } else {
        (frac | (1u64 << 52), exp - 1075)
    };
    if m == 0 {
        return None;
    }
    // x = m * 2^q with m odd.
    let tz = m.trailing_zeros();
    m >>= tz;
    q += tz as i32;
    let e: u128 = if q >= 0 {
        // Trailing decimal zeros: pairs of a factor 5 of m and a factor 2 of 2^q.
        let mut j = 0;
        while j < q && m % 5 == 0 {
            m /= 5;
            j += 1;
        }
        let shift = (q - j) as u32;
        if shift > 60 {
            return None;
        }
        u128::from(m) << shift
    } else {
        // An odd m times a power of 5: no trailing decimal zero.
        if -q > 25 {
            return None;
        }
        u128::from(m) * 5u128.pow((-q) as u32)
    };
    if e >= LIMIT {
        return None;
    }
    Some((e, e.ilog10() as usize + 1))
}

/// Rows of CSV and VOTable text made as one piece.
const PIECE_ROWS: usize = 256;
/// Pieces made at once (in parallel) before they are written out, so that neither document is
/// ever whole in memory.
const BATCH_PIECES: usize = 32;

/// The end of a VOTable document after its rows.
const VOTABLE_END: &str = "</TABLEDATA></DATA>\n</TABLE>\n</RESOURCE>\n</VOTABLE>\n";

/// Appends the decimal text of `x`, as `{x}` would write it.
fn push_i64(s: &mut String, x: i64) {
    let mut buf = [0u8; 20];
    let mut i = buf.len();
    let mut u = x.unsigned_abs();
    loop {
        i -= 1;
        buf[i] = b'0' + (u % 10) as u8;
        u /= 10;
        if u == 0 {
            break;
        }
    }
    if x < 0 {
        s.push('-');
    }
    // Only ASCII digits were written.
    s.push_str(std::str::from_utf8(&buf[i..]).unwrap_or_default());
}

fn csv_field(s: &str) -> String {
    let mut out = String::new();
    push_csv_field(&mut out, s);
    out
}

/// Appends `s` as a CSV field: quoted (quotes doubled) when it holds a comma, a quote or a
/// line break, else as it is.
fn push_csv_field(out: &mut String, s: &str) {
    if s.contains([',', '"', '\n', '\r']) {
        out.push('"');
        for ch in s.chars() {
            if ch == '"' {
                out.push('"');
            }
            out.push(ch);
        }
        out.push('"');
    } else {
        out.push_str(s);
    }
}

/// Appends `s` with the XML special characters `& < > "` escaped.
fn push_xml_escaped(out: &mut String, s: &str) {
    if !s.contains(['&', '<', '>', '"']) {
        out.push_str(s);
        return;
    }
    for ch in s.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            c => out.push(c),
        }
    }
}

impl Table {
    /// Number of rows.
    pub fn nrows(&self) -> usize {
        self.columns.first().map(|c| c.values.len()).unwrap_or(0)
    }

    /// Adds a column of reals.
    pub fn push_f64(&mut self, name: &str, unit: &str, description: &str, values: Vec<f64>) {
        self.push(name, unit, description, Values::F64(values));
    }

    /// Adds a column of integers.
    pub fn push_i64(&mut self, name: &str, unit: &str, description: &str, values: Vec<i64>) {
        self.push(name, unit, description, Values::I64(values));
    }

    /// Adds a column of text.
    pub fn push_text(&mut self, name: &str, description: &str, values: Vec<String>) {
        self.push(name, "", description, Values::Text(values));
    }

    /// Adds a column of flags.
    pub fn push_bool(&mut self, name: &str, description: &str, values: Vec<bool>) {
        self.push(name, "", description, Values::Bool(values));
    }

    fn push(&mut self, name: &str, unit: &str, description: &str, values: Values) {
        assert!(
            self.columns.is_empty() || values.len() == self.nrows(),
            "column {name} has {} rows, the table {}",
            values.len(),
            self.nrows()
        );
        self.columns.push(Column {
            name: name.into(),
            unit: unit.into(),
            description: description.into(),
            values,
        });
    }

    /// The column with this name.
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }

    /// The table as CSV with a commented header, built whole, one cell at a time (the
    /// reference for [`Table::write_csv_and_votable`], which makes the same text in pieces).
    pub fn to_csv(&self) -> String {
        let mut s = self.csv_header();
        for r in 0..self.nrows() {
            let cells: Vec<String> = self
                .columns
                .iter()
                .map(|c| match &c.values {
                    Values::F64(v) => fmt_f64(v[r]),
                    Values::I64(v) => v[r].to_string(),
                    Values::Text(v) => csv_field(&v[r]),
                    Values::Bool(v) => v[r].to_string(),
                })
                .collect();
            s.push_str(&cells.join(","));
            s.push('\n');
        }
        s
    }

    /// The table as a VOTable 1.4 document, built whole, one cell at a time (the reference for
    /// [`Table::write_csv_and_votable`], which makes the same text in pieces).
    pub fn to_votable(&self) -> String {
        let mut s = self.votable_header();
        for r in 0..self.nrows() {
            s.push_str("<TR>");
            for c in &self.columns {
                let cell = match &c.values {
                    Values::F64(v) if v[r].is_nan() => "NaN".to_string(),
                    Values::F64(v) => fmt_f64(v[r]),
                    Values::I64(v) => v[r].to_string(),
                    Values::Text(v) => {
                        let mut t = String::new();
                        push_xml_escaped(&mut t, &v[r]);
                        t
                    }
                    Values::Bool(v) => (if v[r] { "T" } else { "F" }).to_string(),
                };
                s.push_str(&format!("<TD>{cell}</TD>"));
            }
            s.push_str("</TR>\n");
        }
        s.push_str(VOTABLE_END);
        s
    }

    /// Writes the CSV and VOTable forms to `csv` and `votable` (which must be new files; see
    /// [`crate::output`]): the rows in pieces, the pieces of a batch made in parallel, each
    /// number formatted once into the CSV text and copied from there into the VOTable's, so
    /// neither document is ever whole in memory. The files hold exactly `self.to_csv()` and
    /// `self.to_votable()`.
    pub fn write_csv_and_votable(&self, csv: &Path, votable: &Path) -> Result<()> {
        use rayon::prelude::*;
        use std::io::Write as _;
        fn failed(path: &Path) -> impl Fn(std::io::Error) -> Error + '_ {
            move |e| Error::output(path, format!("cannot be written ({e})."))
        }
        let (fail_c, fail_v) = (failed(csv), failed(votable));
        let mut fc = crate::output::create_file(csv).map_err(&fail_c)?;
        let mut fv = crate::output::create_file(votable).map_err(&fail_v)?;
        fc.write_all(self.csv_header().as_bytes())
            .map_err(&fail_c)?;
        fv.write_all(self.votable_header().as_bytes())
            .map_err(&fail_v)?;
        let n = self.nrows();
        let batch = PIECE_ROWS * BATCH_PIECES;
        for b0 in (0..n).step_by(batch) {
            let b1 = (b0 + batch).min(n);
            let pieces: Vec<(String, String)> = (b0..b1)
                .step_by(PIECE_ROWS)
                .collect::<Vec<_>>()
                .into_par_iter()
                .map(|r0| self.rows_text(r0..(r0 + PIECE_ROWS).min(b1)))
                .collect();
            for (c, v) in &pieces {
                fc.write_all(c.as_bytes()).map_err(&fail_c)?;
                fv.write_all(v.as_bytes()).map_err(&fail_v)?;
            }
        }
        fv.write_all(VOTABLE_END.as_bytes()).map_err(fail_v)
    }

    /// The CSV and the VOTable text of rows `rows`: each number formatted once, into the CSV
    /// text, and copied from there.
    fn rows_text(&self, rows: std::ops::Range<usize>) -> (String, String) {
        let mut csv = String::with_capacity(rows.len() * self.columns.len() * 16);
        let mut vot = String::with_capacity(rows.len() * self.columns.len() * 26);
        for r in rows {
            vot.push_str("<TR>");
            for (i, c) in self.columns.iter().enumerate() {
                if i > 0 {
                    csv.push(',');
                }
                vot.push_str("<TD>");
                let at = csv.len();
                match &c.values {
                    Values::F64(v) => {
                        push_f64(&mut csv, v[r]);
                        vot.push_str(if csv.len() == at { "NaN" } else { &csv[at..] });
                    }
                    Values::I64(v) => {
                        push_i64(&mut csv, v[r]);
                        vot.push_str(&csv[at..]);
                    }
                    Values::Text(v) => {
                        push_csv_field(&mut csv, &v[r]);
                        push_xml_escaped(&mut vot, &v[r]);
                    }
                    Values::Bool(v) => {
                        csv.push_str(if v[r] { "true" } else { "false" });
                        vot.push(if v[r] { 'T' } else { 'F' });
                    }
                }
                vot.push_str("</TD>");
            }
            csv.push('\n');
            vot.push_str("</TR>\n");
        }
        (csv, vot)
    }

    /// The CSV's commented header and its line of column names.
    fn csv_header(&self) -> String {
        let mut s = String::new();
        let _ = writeln!(
            s,
            "# {} written by cairn {}",
            self.name,
            env!("CARGO_PKG_VERSION")
        );
        for p in &self.meta {
            let (k, v, c) = (
                one_line(&p.name),
                one_line(&p.value.text()),
                one_line(&p.comment()),
            );
            if c.is_empty() {
                let _ = writeln!(s, "# parameter {k} = {v}");
            } else {
                let _ = writeln!(s, "# parameter {k} = {v}  ({c})");
            }
        }
        for n in &self.notes {
            let _ = writeln!(s, "# note: {}", one_line(n));
        }
        for c in &self.columns {
            let unit = if c.unit.is_empty() {
                String::new()
            } else {
                format!(" [{}]", c.unit)
            };
            let _ = writeln!(s, "# column {}{}: {}", c.name, unit, c.description);
        }
        let header: Vec<String> = self.columns.iter().map(|c| csv_field(&c.name)).collect();
        let _ = writeln!(s, "{}", header.join(","));
        s
    }

    /// The VOTable document up to its first row.
    fn votable_header(&self) -> String {
        fn esc(s: &str) -> String {
            let mut out = String::new();
            push_xml_escaped(&mut out, s);
            out
        }
        let mut s = String::new();
        s.push_str("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
        s.push_str("<VOTABLE version=\"1.4\" xmlns=\"http://www.ivoa.net/xml/VOTable/v1.3\">\n<RESOURCE>\n");
        for (id, system, equinox) in &self.coosys {
            let eq = equinox
                .as_ref()
                .map(|e| format!(" equinox=\"{}\"", esc(e)))
                .unwrap_or_default();
            let _ = writeln!(
                s,
                "<COOSYS ID=\"{}\" system=\"{}\"{eq}/>",
                esc(id),
                esc(system)
            );
        }
        let _ = writeln!(s, "<TABLE name=\"{}\">", esc(&self.name));
        if !self.notes.is_empty() {
            // The notes (what the kinds mean, the conventions, the cautions), a line each.
            let _ = writeln!(
                s,
                "<DESCRIPTION>{}</DESCRIPTION>",
                esc(&self.notes.join("\n"))
            );
        }
        for p in &self.meta {
            // Typed as in the FITS table: numbers as numbers (their text as in the CSV).
            let datatype = match p.value {
                ParamValue::Int(_) => "datatype=\"long\"",
                ParamValue::Float(_) => "datatype=\"double\"",
                ParamValue::Text(_) => "datatype=\"char\" arraysize=\"*\"",
            };
            let value = match p.value {
                ParamValue::Float(x) if x.is_nan() => "NaN".to_string(),
                _ => p.value.text(),
            };
            let unit = if p.unit.is_empty() {
                String::new()
            } else {
                format!(" unit=\"{}\"", esc(&p.unit))
            };
            let _ = writeln!(
                s,
                "<PARAM name=\"{}\" {datatype}{unit} value=\"{}\"><DESCRIPTION>{}</DESCRIPTION></PARAM>",
                esc(&p.name),
                esc(&value),
                esc(&p.description)
            );
        }
        for c in &self.columns {
            let (dt, extra) = match c.values {
                Values::F64(_) => ("double", ""),
                Values::I64(_) => ("long", ""),
                Values::Text(_) => ("char", " arraysize=\"*\""),
                Values::Bool(_) => ("boolean", ""),
            };
            let unit = if c.unit.is_empty() {
                String::new()
            } else {
                format!(" unit=\"{}\"", esc(&c.unit))
            };
            let mut ucd = String::new();
            if let Some((_, u, r)) = self.ucds.iter().find(|(n, _, _)| *n == c.name) {
                ucd = format!(" ucd=\"{}\"", esc(u));
                if !r.is_empty() {
                    ucd.push_str(&format!(" ref=\"{}\"", esc(r)));
                }
            }
            let _ = writeln!(
                s,
                "<FIELD name=\"{}\" datatype=\"{dt}\"{extra}{unit}{ucd}><DESCRIPTION>{}</DESCRIPTION></FIELD>",
                esc(&c.name),
                esc(&c.description)
            );
        }
        s.push_str("<DATA><TABLEDATA>\n");
        s
    }

    /// Writes the table as a FITS file: an empty primary HDU and one binary-table extension.
    /// `path` must not exist (write to a temporary name; see [`crate::output`]).
    pub fn write_fits(&self, path: &Path) -> Result<()> {
        use fitsio::tables::{ColumnDataType, ColumnDescription};
        let fail = |e: fitsio::errors::Error| {
            Error::output(path, format!("cannot be written as FITS ({e})."))
        };
        let mut f =
            crate::output::creating(|| fitsio::FitsFile::create(path).open()).map_err(fail)?;
        let mut descs = Vec::new();
        for c in &self.columns {
            let mut d = ColumnDescription::new(c.name.clone());
            match &c.values {
                Values::F64(_) => d.with_type(ColumnDataType::Double),
                Values::I64(_) => d.with_type(ColumnDataType::LongLong),
                Values::Bool(_) => d.with_type(ColumnDataType::Logical),
                Values::Text(v) => {
                    let w = v.iter().map(|s| s.len()).max().unwrap_or(1).max(1);
                    d.with_type(ColumnDataType::String).that_repeats(w)
                }
            };
            descs.push(d.create().map_err(fail)?);
        }
        let hdu = f.create_table(self.name.clone(), &descs).map_err(fail)?;
        // Every keyword goes in before any data, so CFITSIO never has to move written rows.
        for (i, c) in self.columns.iter().enumerate() {
            if !c.unit.is_empty() {
                hdu.write_key(&mut f, &format!("TUNIT{}", i + 1), c.unit.as_str())
                    .map_err(fail)?;
            }
        }
        let mut continued = false;
        let mut keys = std::collections::HashSet::new();
        for p in &self.meta {
            let key = p.key.as_str();
            // A keyword of the standard form (FITS Standard 4.0 sec. 4.1.2.1), once.
            if key.is_empty()
                || key.len() > 8
                || !key
                    .bytes()
                    .all(|b| b.is_ascii_uppercase() || b.is_ascii_digit() || b == b'-' || b == b'_')
                || !keys.insert(key)
            {
                return Err(Error::internal(format!(
                    "the table parameter {} has the FITS keyword '{key}', which is not a standard keyword of its own (1 to 8 characters of A-Z, 0-9, - and _)",
                    p.name
                )));
            }
            // FITS header text is printable ASCII (FITS 4.0 section 4.2.1).
            let c = printable_ascii(&p.fits_comment());
            let cstr = |t: &str| std::ffi::CString::new(t).expect("no NUL in printable ASCII");
            let (kc, cc) = (cstr(key), cstr(&c));
            let mut status = 0;
            let mut long = false;
            match &p.value {
                // Whole numbers as integers (an HDU index, a pixel count).
                ParamValue::Int(n) => hdu.write_key(&mut f, key, (*n, c.as_str())).map_err(fail)?,
                // An undefined value (FITS 4.0 section 4.1.2.3): FITS has no infinite or
                // NaN numbers in keywords (the CSV and VOTable give the value as text).
                // SAFETY: an open FitsFile on this table and NUL-terminated strings.
                ParamValue::Float(x) if !x.is_finite() => unsafe {
                    fitsio::sys::ffpkyu(f.as_raw(), kc.as_ptr(), cc.as_ptr(), &mut status);
                },
                ParamValue::Float(x) => {
                    let x = *x;
                    // The digits of the CSV's text, which give back the same double: in fixed
                    // notation with its decimals (CFITSIO's F format, ffpkyg) when that text
                    // has no exponent, else in the E format with as many significant digits
                    // (ffpkyd with a negative count).
                    let text = fmt_f64(x);
                    let (put, decim) = match text.split_once('.') {
                        Some((_, frac)) if !text.contains('e') => {
                            (fitsio::sys::ffpkyg as PutDouble, frac.len() as i32)
                        }
                        _ => (
                            fitsio::sys::ffpkyd as PutDouble,
                            -((1..=17)
                                .find(|&n| format!("{:.*e}", n - 1, x).parse::<f64>() == Ok(x))
                                .unwrap_or(17) as i32),
                        ),
                    };
                    // SAFETY: an open FitsFile on this table and NUL-terminated strings.
                    unsafe { put(f.as_raw(), kc.as_ptr(), x, decim, cc.as_ptr(), &mut status) };
                }
                ParamValue::Text(v) => {
                    // Strings of any length, such as a long file name, are written whole:
                    // continued on CONTINUE cards when they do not fit on one (FITS 4.0
                    // section 4.2.1.2, continued string keywords).
                    let text = printable_ascii(v);
                    // A string value holds at most 68 characters on a card of its own, its
                    // quotes doubled (FITS 4.0 section 4.2.1.1).
                    long = text.len() + text.matches('\'').count() > 68;
                    continued |= long;
                    let vc = cstr(&text);
                    // SAFETY: an open FitsFile on this table and NUL-terminated strings.
                    unsafe {
                        fitsio::sys::ffpkls(
                            f.as_raw(),
                            kc.as_ptr(),
                            vc.as_ptr(),
                            cc.as_ptr(),
                            &mut status,
                        )
                    };
                }
            }
            if status == 0 && long && !c.is_empty() {
                // A continued string's comment is on its last CONTINUE card, the header's
                // last card here: when that card cut it, the whole comment follows on
                // COMMENT cards.
                let mut n = 0;
                let mut card = [0 as std::ffi::c_char; 81];
                // SAFETY: an open FitsFile and a buffer of FLEN_CARD (81) bytes.
                unsafe {
                    fitsio::sys::ffghsp(f.as_raw(), &mut n, std::ptr::null_mut(), &mut status);
                    fitsio::sys::ffgrec(f.as_raw(), n, card.as_mut_ptr(), &mut status);
                }
                // SAFETY: CFITSIO wrote a NUL-terminated card.
                let card = unsafe { std::ffi::CStr::from_ptr(card.as_ptr()) }.to_string_lossy();
                if status == 0 && comment_of(&card) != c.trim() {
                    status = comment_cards(&mut f, &format!("{key}: {}", c.trim()));
                }
            }
            if status == 0 && !long && !c.is_empty() {
                // A comment too long for the card after its value (a value of 64 characters
                // leaves room for none) is not cut: the card keeps what fits of the unit and
                // the name, and the whole comment follows on COMMENT cards.
                let description = printable_ascii(&p.description);
                status = whole_comment(
                    &mut f,
                    key,
                    &c,
                    &printable_ascii(&p.comment_head()),
                    &description,
                );
            }
            if status != 0 {
                return Err(Error::output(
                    path,
                    format!("cannot be written as FITS (CFITSIO status {status})."),
                ));
            }
        }
        if continued {
            // The LONGSTRN keyword that announces the convention to older readers.
            let mut status = 0;
            // SAFETY: an open FitsFile.
            unsafe { fitsio::sys::ffplsw(f.as_raw(), &mut status) };
            if status != 0 {
                return Err(Error::output(
                    path,
                    format!("cannot be written as FITS (CFITSIO status {status})."),
                ));
            }
        }
        // The notes (what the kinds mean, the conventions, the cautions) as COMMENT cards,
        // each note wrapped at word boundaries, its continuation cards indented.
        for n in &self.notes {
            let status = comment_cards(&mut f, &printable_ascii(n));
            if status != 0 {
                return Err(Error::output(
                    path,
                    format!("cannot be written as FITS (CFITSIO status {status})."),
                ));
            }
        }
        // The rows are laid out in memory (big-endian, as FITS stores them) and written in one
        // call: column-by-column writes make CFITSIO seek back and forth through the table. The
        // table's length (NAXIS2) is set once the header is complete, not by inserting rows,
        // which would make CFITSIO first write the whole table as zeros, a block at a time.
        let widths: Vec<usize> = self
            .columns
            .iter()
            .map(|c| match &c.values {
                Values::F64(_) | Values::I64(_) => 8,
                Values::Bool(_) => 1,
                Values::Text(v) => v.iter().map(|s| s.len()).max().unwrap_or(1).max(1),
            })
            .collect();
        let row_len: usize = widths.iter().sum();
        let nrows = self.nrows();
        let mut bytes = Vec::with_capacity(row_len * nrows);
        for r in 0..nrows {
            for (c, &w) in self.columns.iter().zip(&widths) {
                match &c.values {
                    Values::F64(v) => bytes.extend_from_slice(&v[r].to_be_bytes()),
                    Values::I64(v) => bytes.extend_from_slice(&v[r].to_be_bytes()),
                    Values::Bool(v) => bytes.push(if v[r] { b'T' } else { b'F' }),
                    Values::Text(v) => {
                        let t = v[r].as_bytes();
                        bytes.extend_from_slice(t);
                        bytes.extend(std::iter::repeat_n(b' ', w - t.len()));
                    }
                }
            }
        }
        if nrows > 0 {
            let mut status = 0;
            // SAFETY: the file is open on this table, whose rows are `row_len` bytes wide (the
            // column formats above); `bytes` holds `nrows` such rows, and NAXIS2 says so
            // (ffrdef makes CFITSIO read the changed header again) before they are written.
            unsafe {
                fitsio::sys::ffmkyj(
                    f.as_raw(),
                    c"NAXIS2".as_ptr(),
                    nrows as i64,
                    c"&".as_ptr(),
                    &mut status,
                );
                fitsio::sys::ffrdef(f.as_raw(), &mut status);
                fitsio::sys::ffptbb(
                    f.as_raw(),
                    1,
                    1,
                    bytes.len() as i64,
                    bytes.as_mut_ptr(),
                    &mut status,
                );
            }
            if status != 0 {
                return Err(Error::output(
                    path,
                    format!("cannot be written as FITS (CFITSIO status {status})."),
                ));
            }
        }
        let _ = &hdu;
        Ok(())
    }
}

/// The comment of a keyword card, from CFITSIO's copy of the card (FITS 4.0 section 4.1.2.3:
/// after the value, a slash and the comment).
fn card_comment(f: &mut fitsio::FitsFile, key: &std::ffi::CStr, status: &mut i32) -> String {
    let mut card = [0 as std::ffi::c_char; 81];
    // SAFETY: an open FitsFile, a NUL-terminated keyword and a buffer of FLEN_CARD (81) bytes.
    unsafe { fitsio::sys::ffgcrd(f.as_raw(), key.as_ptr(), card.as_mut_ptr(), status) };
    if *status != 0 {
        return String::new();
    }
    // SAFETY: CFITSIO wrote a NUL-terminated card.
    let card = unsafe { std::ffi::CStr::from_ptr(card.as_ptr()) }.to_string_lossy();
    comment_of(&card)
}

/// The comment of a card (`KEY = value / comment` or `CONTINUE  'text' / comment`): the
/// text after the first slash outside quotes from column 11 on.
fn comment_of(card: &str) -> String {
    // The value's own text ends before the first slash outside quotes.
    let mut quoted = false;
    for (i, ch) in card.char_indices().skip(10) {
        match ch {
            '\'' => quoted = !quoted,
            '/' if !quoted => return card[i + 1..].trim().to_string(),
            _ => {}
        }
    }
    String::new()
}

/// Makes sure the comment `comment` of keyword `key` is in the header whole: when the card
/// cut it, the card's comment becomes `head` (the unit and the name) and `KEY: description`
/// follows on COMMENT cards, or, when even `head` is cut, the card has no comment and
/// `KEY: comment` follows. Returns CFITSIO's status.
fn whole_comment(
    f: &mut fitsio::FitsFile,
    key: &str,
    comment: &str,
    head: &str,
    description: &str,
) -> i32 {
    let mut status = 0;
    let kc = std::ffi::CString::new(key).expect("no NUL in a keyword");
    if card_comment(f, &kc, &mut status) == comment.trim() || status != 0 {
        return status;
    }
    let mut rest = comment;
    for short in [head, ""] {
        let cc = std::ffi::CString::new(short).expect("no NUL in ASCII");
        // SAFETY: an open FitsFile and NUL-terminated strings.
        unsafe { fitsio::sys::ffmcom(f.as_raw(), kc.as_ptr(), cc.as_ptr(), &mut status) };
        if status != 0 {
            return status;
        }
        if card_comment(f, &kc, &mut status) == short.trim() {
            if !short.is_empty() && !description.is_empty() {
                rest = description;
            }
            break;
        }
    }
    comment_cards(f, &format!("{key}: {rest}"))
}

/// Writes printable ASCII `text` as COMMENT cards, wrapped at word boundaries (continuation
/// cards indented). Returns CFITSIO's status.
fn comment_cards(f: &mut fitsio::FitsFile, text: &str) -> i32 {
    let mut status = 0;
    for line in wrap_words(text, 70) {
        let line = std::ffi::CString::new(line).expect("no NUL in printable ASCII");
        // SAFETY: an open FitsFile and a NUL-terminated string.
        unsafe { fitsio::sys::ffpcom(f.as_raw(), line.as_ptr(), &mut status) };
    }
    status
}

/// Reads the rows of a catalogue CSV (`text`, read from `path`): the header (the first line
/// that is not a `#` comment) and every row, split at the separator outside double quotes (a
/// doubled quote inside quotes is a quote). Catalogues made by hand are read as spreadsheet
/// programs write them: a byte-order mark before the first line is skipped, spaces around
/// cells and column names are dropped, and the separator is a comma, a tab or a semicolon,
/// whichever of them the header line holds most of outside quotes (a comma when it holds
/// none). A row whose number of fields differs from the header's is refused: the file was cut
/// short or edited by hand.
pub fn read_catalogue_csv(path: &Path, text: &str) -> Result<(Vec<String>, Vec<Vec<String>>)> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let mut lines = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.starts_with('#') && !l.trim().is_empty());
    let Some((_, header)) = lines.next() else {
        return Err(Error::input(
            path,
            "holds no catalogue header; give a catalogue written by cairn segment (or run it again).",
        ));
    };
    let sep = csv_separator(header);
    let header = split_csv_line(header, sep);
    let mut rows = Vec::new();
    for (i, l) in lines {
        let r = split_csv_line(l, sep);
        if r.len() != header.len() {
            return Err(Error::input(
                path,
                format!(
                    "line {} has {} fields but the header has {}: the catalogue is damaged; run cairn segment again.",
                    i + 1,
                    r.len(),
                    header.len()
                ),
            ));
        }
        rows.push(r);
    }
    Ok((header, rows))
}

/// The separator of a catalogue whose header line is `header`: the one of comma, tab and
/// semicolon that it holds most of outside double quotes (a comma on a tie or when it holds
/// none of them).
fn csv_separator(header: &str) -> char {
    let mut counts = [0usize; 3];
    let mut quoted = false;
    for c in header.chars() {
        match c {
            '"' => quoted = !quoted,
            ',' if !quoted => counts[0] += 1,
            '\t' if !quoted => counts[1] += 1,
            ';' if !quoted => counts[2] += 1,
            _ => {}
        }
    }
    let mut best = (',', counts[0]);
    for (c, n) in [('\t', counts[1]), (';', counts[2])] {
        if n > best.1 {
            best = (c, n);
        }
    }
    best.0
}

/// `text` with every character outside printable ASCII replaced by `?` (FITS header text).
fn printable_ascii(text: &str) -> String {
    text.chars()
        .map(|ch| {
            if ch.is_ascii() && !ch.is_ascii_control() {
                ch
            } else {
                '?'
            }
        })
        .collect()
}

/// `text` on one line: control characters (a newline in a file name, say) written as escapes
/// (`\n`), so that a commented header line stays one line.
fn one_line(text: &str) -> String {
    if !text.chars().any(char::is_control) {
        return text.to_string();
    }
    text.chars()
        .map(|ch| {
            if ch.is_control() {
                ch.escape_debug().to_string()
            } else {
                ch.to_string()
            }
        })
        .collect()
}

/// One CSV line split at `sep` outside double quotes, each cell without the spaces around
/// it.
fn split_csv_line(line: &str, sep: char) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    let cell = |cur: &mut String| {
        let c = std::mem::take(cur);
        let t = c.trim_matches([' ', '\t']);
        if t.len() == c.len() { c } else { t.to_string() }
    };
    while let Some(c) = chars.next() {
        match c {
            '"' if quoted && chars.peek() == Some(&'"') => {
                cur.push('"');
                chars.next();
            }
            '"' => quoted = !quoted,
            c if c == sep && !quoted => out.push(cell(&mut cur)),
            _ => cur.push(c),
        }
    }
    out.push(cell(&mut cur));
    out
}

/// `text` cut at spaces into lines of at most `width` characters (a longer word is cut), the
/// lines after the first indented by two spaces.
fn wrap_words(text: &str, width: usize) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut cur = String::new();
    for word in text.split(' ').filter(|w| !w.is_empty()) {
        let indent = if lines.is_empty() { 0 } else { 2 };
        if !cur.is_empty() && indent + cur.len() + 1 + word.len() > width {
            lines.push(std::mem::take(&mut cur));
        }
        if !cur.is_empty() {
            cur.push(' ');
        }
        cur.push_str(word);
        loop {
            let indent = if lines.is_empty() { 0 } else { 2 };
            if indent + cur.len() <= width {
                break;
            }
            let rest = cur.split_off(width - indent);
            lines.push(std::mem::replace(&mut cur, rest));
        }
    }
    if !cur.is_empty() || lines.is_empty() {
        lines.push(cur);
    }
    lines
        .into_iter()
        .enumerate()
        .map(|(i, l)| if i == 0 { l } else { format!("  {l}") })
        .collect()
}

#[cfg(test)]
mod tests {
    #[test]
    fn catalogue_lines_split_outside_quotes_and_damage_is_refused() {
        assert_eq!(
            super::split_csv_line(r#"1,"a, ""b""",,x"#, ','),
            ["1", r#"a, "b""#, "", "x"]
        );
        let p = std::path::Path::new("c.csv");
        let (h, r) = super::read_catalogue_csv(p, "# note\nid,kind\n0,leaf\n1,\"x,y\"\n").unwrap();
        assert_eq!((h.len(), r.len()), (2, 2));
        let e = super::read_catalogue_csv(p, "id,kind\n0,leaf\n1,leaf,extra\n").unwrap_err();
        assert!(e.message.contains("line 3 has 3 fields"), "{}", e.message);
        assert!(super::read_catalogue_csv(p, "# only notes\n").is_err());
    }

    #[test]
    fn hand_made_catalogues_read_as_spreadsheets_write_them() {
        let p = std::path::Path::new("c.csv");
        let want = (
            vec!["kind".to_string(), "mass_excess".into(), "radius_pc".into()],
            vec![vec!["leaf".to_string(), "1.5".into(), "0.02".into()]],
        );
        for text in [
            "\u{feff}kind,mass_excess,radius_pc\nleaf,1.5,0.02\n",
            "kind, mass_excess , radius_pc\n leaf, 1.5,0.02 \n",
            "kind\tmass_excess\tradius_pc\nleaf\t1.5\t0.02\n",
            "# note, with a comma\nkind;mass_excess;radius_pc\r\nleaf; 1.5;0.02\r\n",
            "\u{feff}\"kind\";\"mass_excess\";\"radius_pc\"\nleaf;1.5;0.02\n",
        ] {
            assert_eq!(
                super::read_catalogue_csv(p, text).unwrap(),
                want,
                "{text:?}"
            );
        }
        // A comma inside quotes does not make a header comma-separated.
        assert_eq!(super::csv_separator("\"a,b\";c;d"), ';');
        assert_eq!(super::csv_separator("single"), ',');
    }

    #[test]
    fn notes_wrap_at_spaces() {
        let lines = super::wrap_words("aa bb cc dd", 5);
        assert_eq!(lines, ["aa bb", "  cc", "  dd"]);
        assert!(
            super::wrap_words(&"x".repeat(150), 70)
                .iter()
                .all(|l| l.len() <= 70)
        );
        assert_eq!(super::wrap_words("", 70), [""]);
    }
    use super::*;

    fn sample() -> Table {
        let mut t = Table {
            name: "STRUCTURES".into(),
            ..Default::default()
        };
        t.meta.push(Param::new(
            "floor",
            ParamValue::Float(2.5),
            "MJy/sr",
            "lowest level",
        ));
        t.meta.push(Param::new(
            "input",
            ParamValue::Text("cloud.fits".into()),
            "",
            "",
        ));
        t.push_i64("id", "", "structure id", vec![0, 1]);
        t.push_f64("ra", "deg", "right ascension", vec![12.5, f64::NAN]);
        t.push_text(
            "kind",
            "leaf or branch",
            vec!["leaf".into(), "branch, big".into()],
        );
        t.push_bool("edge", "touches the map edge", vec![false, true]);
        t
    }

    /// The files written in pieces hold exactly the documents built whole, for tables of
    /// fewer, exactly as many and more rows than one piece and than one batch of pieces.
    #[test]
    fn files_written_in_pieces_equal_the_whole_documents() {
        let dir = tempfile::tempdir().unwrap();
        let batch = PIECE_ROWS * BATCH_PIECES;
        for n in [
            0,
            1,
            PIECE_ROWS,
            PIECE_ROWS + 1,
            3 * PIECE_ROWS + 17,
            batch,
            batch + 5,
        ] {
            let mut t = Table {
                name: "STRUCTURES".into(),
                ..Default::default()
            };
            t.push_i64(
                "id",
                "",
                "structure id",
                (0..n as i64).map(|i| i - 3).collect(),
            );
            t.push_f64(
                "x",
                "pix",
                "position",
                (0..n)
                    .map(|i| if i % 5 == 2 { f64::NAN } else { i as f64 / 7.0 })
                    .collect(),
            );
            t.push_text(
                "kind",
                "what",
                (0..n).map(|i| format!("k<{i}>, \"")).collect(),
            );
            t.push_bool("edge", "at the edge", (0..n).map(|i| i % 3 == 0).collect());
            let (csv, vot) = (dir.path().join("t.csv"), dir.path().join("t.vot"));
            let _ = (std::fs::remove_file(&csv), std::fs::remove_file(&vot));
            t.write_csv_and_votable(&csv, &vot).unwrap();
            assert_eq!(
                std::fs::read_to_string(&csv).unwrap(),
                t.to_csv(),
                "{n} rows"
            );
            assert_eq!(
                std::fs::read_to_string(&vot).unwrap(),
                t.to_votable(),
                "{n} rows"
            );
        }
    }

    /// Integers as the standard library writes them, the extremes included.
    #[test]
    fn integer_text_equals_the_standard_formatting() {
        let mut next = crate::hierarchy::test_lcg(7);
        let mut values = vec![
            0i64,
            1,
            -1,
            9,
            10,
            -10,
            99,
            100,
            i64::MAX,
            i64::MIN,
            i64::MIN + 1,
        ];
        values.extend((0..10_000).map(|_| next() as i64 >> (next() % 64)));
        for x in values {
            let mut s = String::from("x");
            push_i64(&mut s, x);
            assert_eq!(s, format!("x{x}"));
        }
    }

    #[test]
    fn csv_has_units_parameters_and_quoting() {
        let s = sample().to_csv();
        assert!(s.contains("# parameter floor = 2.5  ([MJy/sr] lowest level)"));
        assert!(s.contains("# parameter input = cloud.fits\n"));
        assert!(s.contains("# column ra [deg]: right ascension"));
        assert!(
            s.contains("id,ra,kind,edge\n0,12.5,leaf,false\n1,,\"branch, big\",true\n"),
            "{s}"
        );
    }

    #[test]
    fn fits_table_round_trips_through_cfitsio() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("t.fits");
        sample().write_fits(&p).unwrap();
        let mut f = fitsio::FitsFile::open(&p).unwrap();
        let hdu = f.hdu("STRUCTURES").unwrap();
        let ra: Vec<f64> = hdu.read_col(&mut f, "ra").unwrap();
        assert_eq!(ra[0], 12.5);
        assert!(ra[1].is_nan());
        let unit: String = hdu.read_key(&mut f, "TUNIT2").unwrap();
        assert_eq!(unit, "deg");
        let floor: f64 = hdu.read_key(&mut f, "FLOOR").unwrap();
        assert_eq!(floor, 2.5);
        let kind: Vec<String> = hdu.read_col(&mut f, "kind").unwrap();
        assert_eq!(kind[1], "branch, big");
    }

    /// A long string's comment cut on its last CONTINUE card follows whole on COMMENT cards;
    /// an infinite number, which FITS keywords cannot hold, is written as an undefined value
    /// (FITS 4.0 section 4.1.2.3) while the CSV gives it as text.
    #[test]
    fn long_string_comments_stay_whole_and_infinities_are_undefined() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("t.fits");
        let mut t = sample();
        let long_name = format!("tmap_{}.fits", "x".repeat(60));
        let description = "file of the dust (and gas) temperature per pixel, on the map's grid";
        t.meta.push(
            Param::new(
                "temperature_map",
                ParamValue::Text(long_name.clone()),
                "",
                description,
            )
            .with_key("TEMPMAP"),
        );
        t.meta.push(Param::new(
            "ceiling",
            ParamValue::Float(f64::INFINITY),
            "MJy/sr",
            "highest level",
        ));
        t.write_fits(&p).unwrap();
        let mut f = fitsio::FitsFile::open(&p).unwrap();
        f.hdu("STRUCTURES").unwrap();
        let mut n = 0;
        let mut status = 0;
        // SAFETY: an open file; a null pointer for the count of free cards.
        unsafe { fitsio::sys::ffghsp(f.as_raw(), &mut n, std::ptr::null_mut(), &mut status) };
        let cards: Vec<String> = (1..=n)
            .map(|i| {
                let mut card = [0 as std::ffi::c_char; 81];
                // SAFETY: an open file and a buffer of FLEN_CARD (81) bytes.
                unsafe { fitsio::sys::ffgrec(f.as_raw(), i, card.as_mut_ptr(), &mut status) };
                // SAFETY: CFITSIO wrote a NUL-terminated card.
                unsafe { std::ffi::CStr::from_ptr(card.as_ptr()) }
                    .to_string_lossy()
                    .into_owned()
            })
            .collect();
        assert_eq!(status, 0);
        let comments: String = cards
            .iter()
            .filter_map(|c| c.strip_prefix("COMMENT "))
            .map(|c| c.trim())
            .collect::<Vec<_>>()
            .join(" ");
        assert!(
            comments.contains(&format!("TEMPMAP: temperature_map: {description}")),
            "{comments}"
        );
        let ceiling = cards.iter().find(|c| c.starts_with("CEILING")).unwrap();
        assert!(
            ceiling.starts_with("CEILING =") && ceiling[10..].trim_start().starts_with('/'),
            "no value: {ceiling}"
        );
        assert!(t.to_csv().contains("# parameter ceiling = inf"));
    }

    #[test]
    fn votable_is_escaped() {
        let s = sample().to_votable();
        assert!(s.contains("<FIELD name=\"ra\" datatype=\"double\" unit=\"deg\">"));
        assert!(s.contains("<TD>NaN</TD>"));
    }
}

#[cfg(test)]
mod number_tests {
    use super::*;

    /// `fmt_f64` equals Rust's own `{:?}` (the layout it promises) on special values and on a
    /// million random bit patterns (splitmix64, seeded).
    #[test]
    fn number_text_equals_rust_debug_formatting() {
        let mut specials = vec![
            1e21,
            0.1,
            1.0,
            1e16,
            9.999999999999998e15,
            1e15,
            1.5e-7,
            1e-5,
            1e-4,
            9.999999999999999e-5,
            0.0001,
            123456789012345680.0,
            5e-324,
            -5e-324,
            f64::MAX,
            f64::MIN_POSITIVE,
            -1.25,
            3e21,
            2.5e-12,
            100.0,
            12345.678,
        ];
        specials.extend(specials.clone().iter().map(|x| -x));
        for x in specials {
            assert_eq!(fmt_f64(x), format!("{x:?}"), "{x:e}");
        }
        assert_eq!(fmt_f64(0.0), "0.0");
        assert_eq!(fmt_f64(-0.0), "-0.0");
        assert_eq!(fmt_f64(f64::NAN), "");
        assert_eq!(fmt_f64(f64::INFINITY), "inf");
        let mut state = 0x1234_5678_9abc_def0u64;
        let mut next = || {
            state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
            let mut z = state;
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^ (z >> 31)
        };
        let mut s = String::new();
        for i in 0..1_000_000u32 {
            let bits = next();
            // Half raw bit patterns, half values of catalogue-like magnitudes.
            let x = if i % 2 == 0 {
                f64::from_bits(bits)
            } else {
                (bits >> 11) as f64 / (1u64 << 53) as f64 * 10f64.powi((bits % 61) as i32 - 30)
            };
            if !x.is_finite() {
                continue;
            }
            // Values with few fractional bits, where halfway cases occur.
            let y = (bits >> 14) as f64 + (bits & 0xff) as f64 / 256.0;
            s.clear();
            push_f64(&mut s, y);
            assert_eq!(s, format!("{y:?}"), "tie bits {bits:#x}");
            s.clear();
            push_f64(&mut s, x);
            assert_eq!(s, format!("{x:?}"), "bits {bits:#x}");
        }
    }
}

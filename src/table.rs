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

/// A table with metadata (the run's parameters).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Table {
    /// Name of the table (EXTNAME in FITS).
    pub name: String,
    /// Columns, all of the same length.
    pub columns: Vec<Column>,
    /// (keyword, value, comment) of the run's parameters.
    pub meta: Vec<(String, String, String)>,
    /// Free text lines for the CSV header (criteria, cautions).
    pub notes: Vec<String>,
}

/// A float in its shortest round-trip form ("" for NaN in CSV).
pub fn fmt_f64(x: f64) -> String {
    if x.is_nan() {
        String::new()
    } else if x.is_infinite() {
        if x > 0.0 { "inf".into() } else { "-inf".into() }
    } else {
        let s = format!("{x:?}");
        // Rust writes 1e21 as "1e21" and 0.1 as "0.1": both parse everywhere.
        s
    }
}

fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
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

    fn cell(&self, col: &Column, row: usize) -> String {
        match &col.values {
            Values::F64(v) => fmt_f64(v[row]),
            Values::I64(v) => v[row].to_string(),
            Values::Text(v) => csv_field(&v[row]),
            Values::Bool(v) => {
                if v[row] {
                    "true".into()
                } else {
                    "false".into()
                }
            }
        }
    }

    /// The table as CSV with a commented header.
    pub fn to_csv(&self) -> String {
        let mut s = String::new();
        let _ = writeln!(
            s,
            "# {} written by cairn {}",
            self.name,
            env!("CARGO_PKG_VERSION")
        );
        for (k, v, c) in &self.meta {
            if c.is_empty() {
                let _ = writeln!(s, "# parameter {k} = {v}");
            } else {
                let _ = writeln!(s, "# parameter {k} = {v}  ({c})");
            }
        }
        for n in &self.notes {
            let _ = writeln!(s, "# note: {n}");
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
        for r in 0..self.nrows() {
            let row: Vec<String> = self.columns.iter().map(|c| self.cell(c, r)).collect();
            let _ = writeln!(s, "{}", row.join(","));
        }
        s
    }

    /// The table as a VOTable 1.4 document.
    pub fn to_votable(&self) -> String {
        fn esc(s: &str) -> String {
            s.replace('&', "&amp;")
                .replace('<', "&lt;")
                .replace('>', "&gt;")
                .replace('"', "&quot;")
        }
        let mut s = String::new();
        s.push_str("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
        s.push_str("<VOTABLE version=\"1.4\" xmlns=\"http://www.ivoa.net/xml/VOTable/v1.3\">\n<RESOURCE>\n");
        let _ = writeln!(s, "<TABLE name=\"{}\">", esc(&self.name));
        for (k, v, c) in &self.meta {
            let _ = writeln!(
                s,
                "<PARAM name=\"{}\" datatype=\"char\" arraysize=\"*\" value=\"{}\"><DESCRIPTION>{}</DESCRIPTION></PARAM>",
                esc(k),
                esc(v),
                esc(c)
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
            let _ = writeln!(
                s,
                "<FIELD name=\"{}\" datatype=\"{dt}\"{extra}{unit}><DESCRIPTION>{}</DESCRIPTION></FIELD>",
                esc(&c.name),
                esc(&c.description)
            );
        }
        s.push_str("<DATA><TABLEDATA>\n");
        for r in 0..self.nrows() {
            s.push_str("<TR>");
            for c in &self.columns {
                let v = match &c.values {
                    Values::F64(v) => {
                        if v[r].is_nan() {
                            "NaN".into()
                        } else {
                            fmt_f64(v[r])
                        }
                    }
                    Values::I64(v) => v[r].to_string(),
                    Values::Text(v) => esc(&v[r]),
                    Values::Bool(v) => {
                        if v[r] {
                            "T".into()
                        } else {
                            "F".into()
                        }
                    }
                };
                let _ = write!(s, "<TD>{v}</TD>");
            }
            s.push_str("</TR>\n");
        }
        s.push_str("</TABLEDATA></DATA>\n</TABLE>\n</RESOURCE>\n</VOTABLE>\n");
        s
    }

    /// Writes the table as a FITS file: an empty primary HDU and one binary-table extension.
    /// `path` must not exist (write to a temporary name; see [`crate::output`]).
    pub fn write_fits(&self, path: &Path) -> Result<()> {
        use fitsio::tables::{ColumnDataType, ColumnDescription};
        let fail = |e: fitsio::errors::Error| {
            Error::output(path, format!("cannot be written as FITS ({e})."))
        };
        let mut f = fitsio::FitsFile::create(path).open().map_err(fail)?;
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
        for (k, v, c) in &self.meta {
            let key = fits_key(k);
            match v.parse::<f64>() {
                Ok(x) if x.is_finite() => {
                    hdu.write_key(&mut f, &key, (x, c.as_str())).map_err(fail)?
                }
                _ => hdu
                    .write_key(&mut f, &key, (v.as_str(), c.as_str()))
                    .map_err(fail)?,
            }
        }
        // The rows are laid out in memory (big-endian, as FITS stores them) and written in one
        // call: column-by-column writes make CFITSIO seek back and forth through the table.
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
            // column formats above); `bytes` holds `nrows` such rows.
            unsafe {
                fitsio::sys::ffirow(f.as_raw(), 0, nrows as i64, &mut status);
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

/// A header keyword for a parameter name: upper case, at most 8 characters of A-Z, 0-9, `-`,
/// `_`, or a HIERARCH keyword when longer.
fn fits_key(name: &str) -> String {
    let k: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c.to_ascii_uppercase()
            } else {
                '_'
            }
        })
        .collect();
    if k.len() <= 8 {
        k
    } else {
        format!("HIERARCH {k}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample() -> Table {
        let mut t = Table {
            name: "STRUCTURES".into(),
            ..Default::default()
        };
        t.meta
            .push(("floor".into(), "2.5".into(), "map units".into()));
        t.meta
            .push(("input".into(), "cloud.fits".into(), String::new()));
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

    #[test]
    fn csv_has_units_parameters_and_quoting() {
        let s = sample().to_csv();
        assert!(s.contains("# parameter floor = 2.5  (map units)"));
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

    #[test]
    fn votable_is_escaped() {
        let s = sample().to_votable();
        assert!(s.contains("<FIELD name=\"ra\" datatype=\"double\" unit=\"deg\">"));
        assert!(s.contains("<TD>NaN</TD>"));
    }
}

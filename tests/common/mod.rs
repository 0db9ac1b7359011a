//! Helpers shared by the integration tests: reading stored outside-reference fixtures.
#![allow(dead_code)]

use std::path::PathBuf;

/// Path of a file under `fixtures/`.
pub fn fixture_path(rel: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures")
        .join(rel)
}

/// Reads a JSON fixture written by a script in `tests/oracle/`.
pub fn fixture_json(rel: &str) -> serde_json::Value {
    let path = fixture_path(rel);
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("cannot read fixture {}: {e}", path.display()));
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("bad JSON in {}: {e}", path.display()))
}

/// A JSON number, or the strings "nan", "inf", "-inf" written for non-finite values.
pub fn num(v: &serde_json::Value) -> f64 {
    match v {
        serde_json::Value::Number(n) => n.as_f64().unwrap(),
        serde_json::Value::String(s) if s == "nan" => f64::NAN,
        serde_json::Value::String(s) if s == "inf" => f64::INFINITY,
        serde_json::Value::String(s) if s == "-inf" => f64::NEG_INFINITY,
        other => panic!("not a number: {other}"),
    }
}

/// A JSON array of numbers.
pub fn nums(v: &serde_json::Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(num).collect()
}

/// Asserts |a - b| <= abs_tol + rel_tol * |b|, with a message naming what is compared.
pub fn assert_close(a: f64, b: f64, rel_tol: f64, abs_tol: f64, what: &str) {
    let ok = (a.is_nan() && b.is_nan()) || (a - b).abs() <= abs_tol + rel_tol * b.abs();
    assert!(
        ok,
        "{what}: cairn {a:.17e}, reference {b:.17e}, difference {:.3e}",
        a - b
    );
}

/// The rows of a catalogue CSV written by cairn (`#` lines skipped), by column name.
pub fn read_csv(path: &std::path::Path) -> Vec<std::collections::HashMap<String, String>> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    lines
        .map(|l| {
            header
                .iter()
                .cloned()
                .zip(l.split(',').map(str::to_string))
                .collect()
        })
        .collect()
}

/// A catalogue row's number in column `k` (NaN when empty).
pub fn field(row: &std::collections::HashMap<String, String>, k: &str) -> f64 {
    row[k].parse().unwrap_or(f64::NAN)
}

//! Reading the parameters of a catalogue that `cairn segment` wrote, in its three forms, and
//! checking that they agree and follow their standards: each FITS keyword of the standard
//! form, at most 8 characters (FITS Standard 4.0 sec. 4.1.2.1), with its unit as `[unit]` at
//! the start of its comment (sec. 4.3.2), and each VOTable PARAM with its `unit` attribute
//! (VOTable 1.4 sec. 4.1) and a description.
#![allow(dead_code)]

use std::path::Path;

/// One parameter of the CSV: `# parameter NAME = VALUE  ([UNIT] DESCRIPTION)`.
#[derive(Debug, Clone)]
pub struct CsvParam {
    pub name: String,
    pub value: String,
    pub unit: String,
    pub description: String,
}

/// One keyword card of the FITS table's header, with the COMMENT cards that name it
/// (`COMMENT KEY: ...`, a comment too long for its card), joined.
#[derive(Debug, Clone)]
pub struct FitsCard {
    pub key: String,
    /// The value as written (a string without its quotes, quotes undoubled).
    pub value: String,
    pub is_string: bool,
    pub comment: String,
    pub more: String,
}

/// One VOTable PARAM.
#[derive(Debug, Clone)]
pub struct VotParam {
    pub name: String,
    pub datatype: String,
    pub unit: Option<String>,
    pub value: String,
    pub description: String,
}

/// The CSV's parameters.
pub fn csv_params(csv: &str) -> Vec<CsvParam> {
    csv.lines()
        .filter_map(|l| l.strip_prefix("# parameter "))
        .map(|l| {
            let (name, rest) = l.split_once(" = ").expect("NAME = VALUE");
            let (value, comment) = match rest.split_once("  (") {
                Some((v, c)) => (v, c.strip_suffix(')').expect("comment in parentheses")),
                None => (rest, ""),
            };
            let (unit, description) =
                match comment.strip_prefix('[').and_then(|c| c.split_once("] ")) {
                    Some((u, d)) => (u, d),
                    None => ("", comment),
                };
            CsvParam {
                name: name.into(),
                value: value.into(),
                unit: unit.into(),
                description: description.into(),
            }
        })
        .collect()
}

/// The 80-character cards of the first extension's header.
pub fn extension_cards(fits: &[u8]) -> Vec<String> {
    let cards: Vec<String> = fits
        .chunks(80)
        .map(|c| String::from_utf8_lossy(c).into_owned())
        .collect();
    let start = cards
        .iter()
        .position(|c| c.starts_with("XTENSION="))
        .expect("an extension");
    let end = start
        + cards[start..]
            .iter()
            .position(|c| c.starts_with("END     ") || c.trim_end() == "END")
            .expect("END");
    cards[start..end].to_vec()
}

/// The parameter keyword cards of a catalogue's FITS table (not the table's structure:
/// XTENSION to TFIELDS, TTYPEn, TFORMn, TUNITn, EXTNAME; nor LONGSTRN and CONTINUE).
pub fn fits_params(fits: &[u8]) -> Vec<FitsCard> {
    let cards = extension_cards(fits);
    let structural = [
        "XTENSION", "BITPIX", "NAXIS", "NAXIS1", "NAXIS2", "PCOUNT", "GCOUNT", "TFIELDS",
        "EXTNAME", "LONGSTRN", "CONTINUE", "COMMENT", "HISTORY", "",
    ];
    let mut out: Vec<FitsCard> = Vec::new();
    let mut comment_of: Option<usize> = None;
    for c in &cards {
        let key = c[..8].trim_end().to_string();
        if key == "COMMENT" {
            let text = c[8..].trim();
            match comment_of {
                Some(i) if c[8..].starts_with("  ") => {
                    // A wrapped line of the same comment.
                    out[i].more.push(' ');
                    out[i].more.push_str(text);
                }
                _ => {
                    comment_of = out
                        .iter()
                        .position(|p| text.starts_with(&format!("{}: ", p.key)));
                    if let Some(i) = comment_of {
                        out[i].more = text[out[i].key.len() + 2..].to_string();
                    }
                }
            }
            continue;
        }
        comment_of = None;
        if key == "CONTINUE" {
            // A long string continued (FITS 4.0 section 4.2.1.2): the part before `&` on
            // each card, the comment on the last.
            let last = out.last_mut().expect("CONTINUE after a string");
            let body = c[10..].trim_start().strip_prefix('\'').expect("a string");
            let (part, rest) = body.split_once('\'').expect("closing quote");
            last.value = last
                .value
                .strip_suffix('&')
                .expect("a continued string")
                .to_string();
            last.value.push_str(part.trim_end());
            if let Some(comment) = rest.trim_start().strip_prefix('/') {
                last.comment = comment.trim().to_string();
            }
            continue;
        }
        if structural.contains(&key.as_str())
            || ["TTYPE", "TFORM", "TUNIT"]
                .iter()
                .any(|t| key.starts_with(t))
        {
            continue;
        }
        assert_eq!(&c[8..10], "= ", "a keyword card with a value: {c:?}");
        let field = &c[10..];
        let (value, rest, is_string) = if let Some(body) = field.trim_start().strip_prefix('\'') {
            // A string: up to the closing quote, doubled quotes standing for one.
            let mut v = String::new();
            let mut chars = body.char_indices().peekable();
            let mut end = body.len();
            while let Some((i, ch)) = chars.next() {
                if ch == '\'' {
                    if chars.peek().map(|p| p.1) == Some('\'') {
                        v.push('\'');
                        chars.next();
                    } else {
                        end = i + 1;
                        break;
                    }
                } else {
                    v.push(ch);
                }
            }
            (v.trim_end().to_string(), &body[end..], true)
        } else {
            let v = field.split('/').next().unwrap_or("");
            (v.trim().to_string(), &field[v.len()..], false)
        };
        let comment = rest
            .trim_start()
            .strip_prefix('/')
            .map(|r| r.trim().to_string())
            .unwrap_or_default();
        out.push(FitsCard {
            key,
            value,
            is_string,
            comment,
            more: String::new(),
        });
    }
    out
}

/// The VOTable's PARAMs.
pub fn vot_params(vot: &str) -> Vec<VotParam> {
    let doc = roxmltree::Document::parse(vot).expect("well-formed VOTable");
    doc.descendants()
        .filter(|n| n.has_tag_name("PARAM"))
        .map(|n| VotParam {
            name: n.attribute("name").unwrap().into(),
            datatype: n.attribute("datatype").unwrap().into(),
            unit: n.attribute("unit").map(str::to_string),
            value: n.attribute("value").unwrap().into(),
            description: n
                .children()
                .find(|c| c.has_tag_name("DESCRIPTION"))
                .and_then(|c| c.text())
                .unwrap_or("")
                .into(),
        })
        .collect()
}

/// The parameters of the catalogue `stem` (`structures` or `structures-grown`) in folder
/// `dir`, checked to agree across the CSV, the FITS table and the VOTable, and to follow the
/// standards (see the module's comment): every parameter has a description, every FITS
/// keyword is of the standard form and carries its parameter's name (as the keyword itself,
/// or in the comment), its value and its unit at the start of its comment, and its whole
/// description on the card or on the COMMENT cards that name it. Returns the CSV's
/// parameters with the FITS card and the VOTable PARAM of each.
pub fn checked_params(dir: &Path, stem: &str) -> Vec<(CsvParam, FitsCard, VotParam)> {
    let csv = std::fs::read_to_string(dir.join(format!("{stem}.csv"))).unwrap();
    let fits = std::fs::read(dir.join(format!("{stem}.fits"))).unwrap();
    let vot = std::fs::read_to_string(dir.join(format!("{stem}.vot"))).unwrap();
    let header = extension_cards(&fits).join("");
    assert!(
        !header.contains("HIERARCH"),
        "a HIERARCH keyword in {stem}.fits"
    );
    let cards = fits_params(&fits);
    let pars = vot_params(&vot);
    let csv = csv_params(&csv);
    assert_eq!(csv.len(), pars.len(), "as many PARAMs as CSV parameters");
    assert_eq!(csv.len(), cards.len(), "as many keywords as CSV parameters");
    let mut out = Vec::new();
    for (c, p) in csv.into_iter().zip(pars) {
        assert!(!c.description.is_empty(), "{}: no description", c.name);
        assert_eq!(p.name, c.name);
        assert_eq!(p.description, c.description, "{}", c.name);
        assert_eq!(p.unit.clone().unwrap_or_default(), c.unit, "{}", c.name);
        if p.datatype == "double" && c.value.is_empty() {
            assert_eq!(p.value, "NaN", "{}", c.name);
        } else {
            assert_eq!(p.value, c.value, "{}", c.name);
        }
        // The keyword: the name in upper case, or a short one with the name in its comment.
        let upper = c.name.to_ascii_uppercase();
        let card = cards
            .iter()
            .find(|k| k.key == upper)
            .or_else(|| {
                cards.iter().find(|k| {
                    let text = format!("{} {}", k.comment, k.more);
                    text.contains(&format!("{}:", c.name))
                        || text
                            .split_whitespace()
                            .any(|w| w.trim_end_matches(':') == c.name)
                })
            })
            .unwrap_or_else(|| panic!("no FITS keyword for {}", c.name))
            .clone();
        let key = &card.key;
        assert!(
            (1..=8).contains(&key.len())
                && key.bytes().all(|b| b.is_ascii_uppercase()
                    || b.is_ascii_digit()
                    || b == b'-'
                    || b == b'_'),
            "{key} is not a standard keyword"
        );
        // Types as the VOTable gives them; numbers equal to the CSV's.
        match p.datatype.as_str() {
            "char" => {
                assert!(card.is_string, "{key} is text");
                assert_eq!(card.value, c.value, "{key}");
            }
            "long" => {
                assert!(!card.is_string, "{key} is a number");
                assert_eq!(
                    card.value.parse::<i64>().ok(),
                    c.value.parse().ok(),
                    "{key}"
                );
            }
            "double" => {
                assert!(!card.is_string, "{key} is a number");
                let fits_value: f64 = card.value.replace(['E', 'D'], "e").parse().unwrap();
                assert_eq!(Some(fits_value), c.value.parse().ok(), "{key}");
            }
            other => panic!("{}: datatype {other}", c.name),
        }
        if !c.unit.is_empty() {
            assert!(
                card.comment.starts_with(&format!("[{}]", c.unit)),
                "{key}: the unit first in the comment, {:?}",
                card.comment
            );
        }
        let text = format!("{} {}", card.comment, card.more);
        assert!(
            text.contains(&c.description),
            "{key}: the description '{}' whole in {text:?}",
            c.description
        );
        out.push((c, card, p));
    }
    out
}

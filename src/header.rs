//! FITS header cards: parsing the 80-character card images of one HDU into typed values.
//!
//! Owns the representation of a header as an ordered list of cards, the parsing rules of the
//! FITS Standard, Definition of the Flexible Image Transport System (FITS), version 4.0 (IAU
//! FITS Working Group, 2016; document of 2018 August 13), section 4, for fixed- and
//! free-format values, string values continued on `CONTINUE` cards (the long-string convention,
//! section 4.2.1.2), read as one value and written so, and typed look-ups (`get_f64`,
//! `get_str`, ...). It knows nothing of WCS or units:
//! those modules read what they need through [`Header`].

use std::fmt;

/// One value of a header card.
#[derive(Debug, Clone, PartialEq)]
pub enum Value {
    /// A character string, with the FITS doubled quotes undone and trailing blanks removed.
    Str(String),
    /// A logical `T` or `F`.
    Bool(bool),
    /// An integer that fits in 64 bits.
    Int(i64),
    /// A real number (Fortran `D` exponents accepted).
    Float(f64),
    /// Anything else (complex numbers, malformed values), kept verbatim.
    Other(String),
}

impl Value {
    /// The value as a real number, when it is numeric.
    pub fn as_f64(&self) -> Option<f64> {
        match self {
            Value::Int(i) => Some(*i as f64),
            Value::Float(f) => Some(*f),
            _ => None,
        }
    }
}

impl fmt::Display for Value {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Value::Str(s) => write!(f, "'{s}'"),
            Value::Bool(b) => write!(f, "{}", if *b { "T" } else { "F" }),
            Value::Int(i) => write!(f, "{i}"),
            Value::Float(x) => write!(f, "{x:e}"),
            Value::Other(s) => write!(f, "{s}"),
        }
    }
}

/// One header card: keyword, optional value and comment.
#[derive(Debug, Clone, PartialEq)]
pub struct Card {
    /// Keyword, upper case, trailing blanks removed (`HIERARCH` keywords keep their full name).
    pub key: String,
    /// The value, for value cards (`= ` in columns 9-10).
    pub value: Option<Value>,
    /// The comment after the `/`, or the text of commentary cards.
    pub comment: String,
}

/// The cards of one HDU header, in order.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Header {
    cards: Vec<Card>,
}

impl Header {
    /// An empty header.
    pub fn new() -> Self {
        Self::default()
    }

    /// Parses a header from its concatenated 80-character card images (as stored in a FITS
    /// file, or as returned by CFITSIO's `fits_hdr2str`). Parsing stops at `END`.
    pub fn parse(text: &str) -> Self {
        Self::parse_bytes(text.as_bytes())
    }

    /// [`Header::parse`] of raw bytes: each 80-byte card is cut first, and a byte outside
    /// printable ASCII (which FITS does not allow in a header, but which Latin-1 comments
    /// bring) reads as `?`, so such a byte never shifts the cards after it.
    ///
    /// A string value continued on `CONTINUE` cards (the long-string convention of the FITS
    /// Standard 4.0, section 4.2.1.2: every part but the last ends in `&`, and each next
    /// part is the quoted string of a `CONTINUE` card, which has no `=` in column 9) is read
    /// as one value, the parts' comments joined by a space, and those `CONTINUE` cards are
    /// taken into it. A `CONTINUE` card that follows no string ending in `&` is commentary, as
    /// the convention asks of readers; a final `&` with no `CONTINUE` card after it stays in
    /// the value (as astropy 8.0.2's reader keeps it).
    pub fn parse_bytes(bytes: &[u8]) -> Self {
        let mut cards: Vec<Card> = Vec::new();
        // Whether the last card's string value ends in `&` and may be continued.
        let mut open = false;
        for chunk in bytes.chunks(80) {
            let line: String = chunk
                .iter()
                .map(|&b| if b.is_ascii() { b as char } else { '?' })
                .collect();
            let line = line.as_str();
            let key = line
                .get(..8.min(line.len()))
                .unwrap_or("")
                .trim_end()
                .to_string();
            if key == "END" {
                break;
            }
            if open
                && key == "CONTINUE"
                && let (Some(Value::Str(more)), comment) = parse_value(line.get(8..).unwrap_or(""))
                && let Some(Card {
                    value: Some(Value::Str(s)),
                    comment: c,
                    ..
                }) = cards.last_mut()
            {
                s.pop();
                s.push_str(&more);
                if !comment.is_empty() {
                    if !c.is_empty() {
                        c.push(' ');
                    }
                    c.push_str(&comment);
                }
                open = s.ends_with('&');
                continue;
            }
            let card = parse_card(line);
            open = matches!(&card.value, Some(Value::Str(s)) if s.ends_with('&'));
            cards.push(card);
        }
        Header { cards }
    }

    /// Builds a header from cards.
    pub fn from_cards(cards: Vec<Card>) -> Self {
        Header { cards }
    }

    /// All cards, in order.
    pub fn cards(&self) -> &[Card] {
        &self.cards
    }

    /// Appends a value card, or replaces the value of the first card with that keyword.
    pub fn set(&mut self, key: &str, value: Value, comment: &str) {
        let key = key.to_ascii_uppercase();
        if let Some(card) = self
            .cards
            .iter_mut()
            .find(|c| c.key == key && c.value.is_some())
        {
            card.value = Some(value);
            card.comment = comment.to_string();
        } else {
            self.cards.push(Card {
                key,
                value: Some(value),
                comment: comment.to_string(),
            });
        }
    }

    /// The value cards whose keyword appears more than once, by keyword (in order of first
    /// appearance), each with its values in order.
    pub fn repeated(&self) -> Vec<(String, Vec<Value>)> {
        let mut out: Vec<(String, Vec<Value>)> = Vec::new();
        for c in &self.cards {
            let Some(v) = &c.value else { continue };
            match out.iter_mut().find(|(k, _)| *k == c.key) {
                Some((_, vs)) => vs.push(v.clone()),
                None => out.push((c.key.clone(), vec![v.clone()])),
            }
        }
        out.retain(|(_, vs)| vs.len() > 1);
        out
    }

    /// The same header with only the last value card of each of the keywords `keep_last`
    /// selects (others unchanged).
    pub fn last_of(&self, keep_last: impl Fn(&str) -> bool) -> Header {
        let mut cards: Vec<Card> = Vec::with_capacity(self.cards.len());
        for (i, c) in self.cards.iter().enumerate() {
            let later = c.value.is_some()
                && keep_last(&c.key)
                && self.cards[i + 1..]
                    .iter()
                    .any(|d| d.key == c.key && d.value.is_some());
            if !later {
                cards.push(c.clone());
            }
        }
        Header { cards }
    }

    /// Removes every value card with this keyword.
    pub fn remove(&mut self, key: &str) {
        let key = key.to_ascii_uppercase();
        self.cards.retain(|c| !(c.key == key && c.value.is_some()));
    }

    /// The value of the first value card with this keyword (case-insensitive).
    pub fn get(&self, key: &str) -> Option<&Value> {
        let key = key.to_ascii_uppercase();
        self.cards
            .iter()
            .find(|c| c.key == key && c.value.is_some())
            .and_then(|c| c.value.as_ref())
    }

    /// Whether a value card with this keyword exists.
    pub fn contains(&self, key: &str) -> bool {
        self.get(key).is_some()
    }

    /// A numeric value (integers are converted).
    pub fn get_f64(&self, key: &str) -> Option<f64> {
        self.get(key).and_then(Value::as_f64)
    }

    /// An integer value.
    pub fn get_i64(&self, key: &str) -> Option<i64> {
        match self.get(key)? {
            Value::Int(i) => Some(*i),
            Value::Float(f) if f.fract() == 0.0 && f.abs() < 9.0e15 => Some(*f as i64),
            _ => None,
        }
    }

    /// A string value, trailing blanks removed.
    pub fn get_str(&self, key: &str) -> Option<&str> {
        match self.get(key)? {
            Value::Str(s) => Some(s.as_str()),
            _ => None,
        }
    }

    /// A logical value.
    pub fn get_bool(&self, key: &str) -> Option<bool> {
        match self.get(key)? {
            Value::Bool(b) => Some(*b),
            _ => None,
        }
    }

    /// Renders the header as card images (without `END`), each exactly 80 characters; a
    /// string too long for one card takes several ([`card_images`]).
    pub fn to_card_images(&self) -> Vec<String> {
        self.cards.iter().flat_map(card_images).collect()
    }
}

/// The card images of one card, each exactly 80 characters: one, or for a string value too
/// long for one card (more than 68 characters once its quotes are doubled), the first part
/// on the card itself and the rest on `CONTINUE` cards, every part but the last ending in
/// `&` (the long-string convention, FITS Standard 4.0, section 4.2.1.2; parts of at most 67
/// characters, a doubled quote never split). The comment goes on the last card, cut to what
/// fits there.
pub fn card_images(card: &Card) -> Vec<String> {
    let long = match &card.value {
        Some(Value::Str(t)) if card.key.len() <= 8 && t.replace('\'', "''").len() > 68 => {
            t.replace('\'', "''")
        }
        _ => return vec![format_card(card)],
    };
    let mut parts: Vec<&str> = Vec::new();
    let mut rest = long.as_str();
    while rest.len() > 68 {
        let mut cut = 67;
        // A doubled quote stays whole: count the quotes that end the part.
        let quotes = rest[..cut]
            .bytes()
            .rev()
            .take_while(|&b| b == b'\'')
            .count();
        if quotes % 2 == 1 {
            cut -= 1;
        }
        parts.push(&rest[..cut]);
        rest = &rest[cut..];
    }
    parts.push(rest);
    let last = parts.len() - 1;
    parts
        .iter()
        .enumerate()
        .map(|(i, p)| {
            let amp = if i < last { "&" } else { "" };
            let mut s = if i == 0 {
                format!("{:<8}= '{p}{amp}'", card.key)
            } else {
                format!("CONTINUE  '{p}{amp}'")
            };
            if i == last && !card.comment.is_empty() {
                s.push_str(&format!(" / {}", card.comment));
            }
            s.truncate(80);
            format!("{s:<80}")
        })
        .collect()
}

fn parse_card(line: &str) -> Card {
    let key_field = line.get(..8.min(line.len())).unwrap_or("");
    let key = key_field.trim_end().to_ascii_uppercase();
    if key == "HIERARCH" {
        // HIERARCH long keywords: "HIERARCH A B C = value / comment"
        let rest = line.get(8..).unwrap_or("");
        if let Some(eq) = rest.find('=') {
            let name = rest[..eq].trim().to_ascii_uppercase();
            let (value, comment) = parse_value(&rest[eq + 1..]);
            return Card {
                key: name,
                value,
                comment,
            };
        }
    }
    let has_value = line.len() >= 10 && &line[8..10] == "= ";
    if has_value && key != "COMMENT" && key != "HISTORY" && !key.is_empty() {
        let (value, comment) = parse_value(&line[10..]);
        Card {
            key,
            value,
            comment,
        }
    } else {
        Card {
            key,
            value: None,
            comment: line.get(8..).unwrap_or("").trim_end().to_string(),
        }
    }
}

/// Parses the value field of a card: returns the value and the comment.
fn parse_value(field: &str) -> (Option<Value>, String) {
    let s = field.trim_start();
    if let Some(rest) = s.strip_prefix('\'') {
        // String: '' inside is an escaped quote.
        let mut out = String::new();
        let mut chars = rest.char_indices().peekable();
        let mut end = rest.len();
        while let Some((i, c)) = chars.next() {
            if c == '\'' {
                if matches!(chars.peek(), Some((_, '\''))) {
                    out.push('\'');
                    chars.next();
                } else {
                    end = i + 1;
                    break;
                }
            } else {
                out.push(c);
            }
        }
        let after = &rest[end.min(rest.len())..];
        let comment = after
            .find('/')
            .map(|p| after[p + 1..].trim().to_string())
            .unwrap_or_default();
        return (Some(Value::Str(out.trim_end().to_string())), comment);
    }
    let (raw, comment) = match s.find('/') {
        Some(p) => (s[..p].trim(), s[p + 1..].trim().to_string()),
        None => (s.trim(), String::new()),
    };
    if raw.is_empty() {
        return (None, comment);
    }
    let value = match raw {
        "T" => Value::Bool(true),
        "F" => Value::Bool(false),
        _ => {
            if let Ok(i) = raw.parse::<i64>() {
                Value::Int(i)
            } else if let Ok(f) = raw.replace(['D', 'd'], "E").parse::<f64>() {
                Value::Float(f)
            } else {
                Value::Other(raw.to_string())
            }
        }
    };
    (Some(value), comment)
}

fn format_card(card: &Card) -> String {
    let mut s = match &card.value {
        None => format!("{:<8}{}", card.key, card.comment),
        Some(v) => {
            let vtxt = match v {
                Value::Str(t) => {
                    let q = format!("'{:<8}'", t.replace('\'', "''"));
                    format!("{q:<20}")
                }
                Value::Bool(b) => format!("{:>20}", if *b { "T" } else { "F" }),
                Value::Int(i) => format!("{i:>20}"),
                Value::Float(x) => format!("{:>20}", format_float(*x)),
                Value::Other(t) => format!("{t:>20}"),
            };
            if card.key.len() > 8 {
                format!("HIERARCH {} = {} / {}", card.key, vtxt.trim(), card.comment)
            } else if card.comment.is_empty() {
                format!("{:<8}= {}", card.key, vtxt)
            } else {
                format!("{:<8}= {} / {}", card.key, vtxt, card.comment)
            }
        }
    };
    if s.len() > 80 {
        s.truncate(80);
    }
    format!("{s:<80}")
}

/// Formats a real so that it round-trips exactly and fits in a 20-character value field.
pub fn format_float(x: f64) -> String {
    if x == 0.0 {
        return "0.0".to_string();
    }
    // Rust's shortest round-trip representation, in exponent form when long.
    let plain = format!("{x:?}");
    if plain.len() <= 20 {
        return if plain.contains('.')
            || plain.contains('e')
            || plain.contains("inf")
            || plain.contains("NaN")
        {
            plain.replace('e', "E")
        } else {
            format!("{plain}.0")
        };
    }
    let e = format!("{x:E}");
    if e.contains('.') {
        e
    } else {
        e.replacen('E', ".0E", 1)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn card(s: &str) -> String {
        format!("{s:<80}")
    }

    #[test]
    fn parses_fixed_and_free_format_values() {
        // Card images written as in the FITS Standard 4.0, section 4.2 examples.
        let text = [
            card("SIMPLE  =                    T / conforms"),
            card("BITPIX  =                  -32"),
            card("CDELT1  =  -1.3888888888889E-03 / deg"),
            card("CRVAL2  = 1.5D+01"),
            card("CTYPE1  = 'RA---TAN'           / projection"),
            card("OBJECT  = 'it''s a test'"),
            card("COMMENT this is a comment = not a value"),
            card("END"),
            card("AFTER   = 1"),
        ]
        .concat();
        let h = Header::parse(&text);
        assert_eq!(h.get_bool("SIMPLE"), Some(true));
        assert_eq!(h.get_i64("BITPIX"), Some(-32));
        assert_eq!(h.get_f64("cdelt1"), Some(-1.3888888888889e-3));
        assert_eq!(h.get_f64("CRVAL2"), Some(15.0));
        assert_eq!(h.get_str("CTYPE1"), Some("RA---TAN"));
        assert_eq!(h.get_str("OBJECT"), Some("it's a test"));
        assert!(h.get("COMMENT").is_none());
        assert!(h.get("AFTER").is_none(), "parsing stops at END");
    }

    /// The long-string convention (FITS Standard 4.0, section 4.2.1.2): parts ending in `&`
    /// joined with the strings of the `CONTINUE` cards that follow, comments joined; a
    /// `CONTINUE` card after a string without `&` stays commentary, and an `&` with no
    /// `CONTINUE` after it stays in the value. (Against astropy 8.0.2's reader in
    /// tests/header_reference.rs.)
    #[test]
    fn continued_strings_are_read_whole() {
        let text = [
            card("BUNIT   = 'MJy/&'"),
            card("CONTINUE  'sr'"),
            card("OBJECT  = 'it''s &' / one"),
            card("CONTINUE  'long  &'  / two"),
            card("CONTINUE  'indeed'"),
            card("NOTCONT = 'plain'"),
            card("CONTINUE  'not part of it'"),
            card("DANGLING= 'ends in &'"),
            card("HISTORY x"),
            card("AFTER   = 3"),
        ]
        .concat();
        let h = Header::parse(&text);
        assert_eq!(h.get_str("BUNIT"), Some("MJy/sr"));
        assert_eq!(h.get_str("OBJECT"), Some("it's long  indeed"));
        let object = h.cards().iter().find(|c| c.key == "OBJECT").unwrap();
        assert_eq!(object.comment, "one two");
        assert_eq!(h.get_str("NOTCONT"), Some("plain"));
        assert_eq!(h.get_str("DANGLING"), Some("ends in &"));
        assert_eq!(h.get_i64("AFTER"), Some(3));
        let keys: Vec<&str> = h.cards().iter().map(|c| c.key.as_str()).collect();
        assert_eq!(
            keys,
            [
                "BUNIT", "OBJECT", "NOTCONT", "CONTINUE", "DANGLING", "HISTORY", "AFTER"
            ]
        );
    }

    /// A string too long for one card is written on CONTINUE cards (every part of at most 67
    /// characters and an `&`, a doubled quote never split, the comment on the last card), and
    /// reads back whole; each card image is 80 characters.
    #[test]
    fn long_strings_are_written_on_continue_cards() {
        for value in [
            "x".repeat(68),
            "x".repeat(69),
            format!("{}'z", "y".repeat(66)),
            format!("{}'''", "q".repeat(65)),
            "a 'quoted' word ".repeat(12).trim_end().to_string(),
        ] {
            let c = Card {
                key: "LONGKEY".into(),
                value: Some(Value::Str(value.clone())),
                comment: "the comment".into(),
            };
            let images = card_images(&c);
            assert!(images.iter().all(|i| i.len() == 80), "{images:?}");
            let escaped = value.replace('\'', "''");
            assert_eq!(images.len() > 1, escaped.len() > 68, "{images:?}");
            for (i, image) in images.iter().enumerate() {
                let body = image[10..].trim_end();
                let part = body.split(" / ").next().unwrap().trim();
                let inner = &part[1..part.len() - 1];
                assert!(inner.len() <= 68, "{image}");
                // Quotes inside a part come in pairs.
                let quotes = inner.bytes().filter(|&b| b == b'\'').count();
                assert!(quotes % 2 == 0, "{image}");
                assert_eq!(inner.ends_with('&'), i + 1 < images.len(), "{image}");
                assert_eq!(image.starts_with("CONTINUE  '"), i > 0, "{image}");
            }
            let back = Header::parse(&images.concat());
            assert_eq!(back.get_str("LONGKEY"), Some(value.as_str()));
            assert_eq!(back.cards().len(), 1);
            // The comment goes on the last card, except where a value of 68 characters fills
            // its one card.
            let comment = if images.len() == 1 { "" } else { "the comment" };
            assert_eq!(back.cards()[0].comment, comment, "{images:?}");
        }
    }

    #[test]
    fn formatted_cards_round_trip() {
        let mut h = Header::new();
        h.set("CDELT1", Value::Float(-1.0 / 720.0), "deg");
        h.set("NAXIS1", Value::Int(512), "");
        h.set("BUNIT", Value::Str("MJy/sr".into()), "");
        h.set("PI", Value::Float(std::f64::consts::PI), "");
        let text: String = h.to_card_images().concat();
        assert!(h.to_card_images().iter().all(|c| c.len() == 80));
        let back = Header::parse(&text);
        assert_eq!(back.get_f64("CDELT1"), Some(-1.0 / 720.0));
        assert_eq!(back.get_f64("PI"), Some(std::f64::consts::PI));
        assert_eq!(back.get_i64("NAXIS1"), Some(512));
        assert_eq!(back.get_str("BUNIT"), Some("MJy/sr"));
    }
}

//! FITS header units: 2880-byte blocks of 80-character ASCII cards ending at `END`.
//!
//! Follows the FITS Standard 4.0 (IAU FITS Working Group 2016, §4): `KEYWORD = value
//! / comment`, strings in single quotes with `''` for a quote, reals with `E` or `D`
//! exponents, and long strings split over `CONTINUE` cards ending in `&`.

use std::io::Read;

/// FITS block size in bytes.
pub const BLOCK: usize = 2880;
const CARD: usize = 80;
/// Refuse headers longer than this many blocks: a corrupt file, not a real header.
const MAX_HEADER_BLOCKS: usize = 1000;

/// A header value.
#[derive(Debug, Clone, PartialEq)]
pub enum Value {
    Str(String),
    Logical(bool),
    Int(i64),
    Real(f64),
    /// Keyword with an empty value field.
    Undefined,
}

/// The keyword cards of one header unit, in order, with `CONTINUE` strings joined.
#[derive(Debug, Clone, Default)]
pub struct Cards {
    cards: Vec<(String, Value)>,
}

impl Cards {
    /// Reads one header unit from `r`. Returns `Ok(None)` at a clean end of file
    /// (no further header unit).
    ///
    /// # Errors
    /// A message for truncation, bytes that are not printable ASCII, a missing `END`
    /// (including one that runs into the next header unit) or an unreadable value.
    pub fn read(r: &mut impl Read) -> Result<Option<Cards>, String> {
        let mut block = [0u8; BLOCK];
        let mut cards = Cards::default();
        for n in 0..MAX_HEADER_BLOCKS {
            match read_block(r, &mut block)? {
                false if n == 0 => return Ok(None),
                false => return Err("file ends inside a header (no END card)".into()),
                true => {}
            }
            for (j, card) in block.chunks_exact(CARD).enumerate() {
                let number = n * (BLOCK / CARD) + j + 1;
                // The FITS Standard allows only printable ASCII (0x20 to 0x7E) in a header.
                if let Some(at) = card.iter().position(|b| !(0x20..=0x7e).contains(b)) {
                    return Err(format!(
                        "header card {number} holds byte 0x{:02x} at column {}, \
                         but a FITS header is printable ASCII only",
                        card[at],
                        at + 1
                    ));
                }
                let card = std::str::from_utf8(card).expect("ASCII checked");
                let key = card[..8].trim_end();
                if key == "END" {
                    return Ok(Some(cards));
                }
                // SIMPLE and XTENSION are only ever the first card of a header unit.
                if number > 1 && (key == "SIMPLE" || key == "XTENSION") {
                    return Err(format!(
                        "header card {number} is {key}: the header unit before it has no END card"
                    ));
                }
                cards.push_card(card)?;
            }
        }
        Err(format!(
            "no END card in the first {MAX_HEADER_BLOCKS} header blocks"
        ))
    }

    fn push_card(&mut self, card: &str) -> Result<(), String> {
        let key = card[..8].trim_end();
        if key == "CONTINUE" {
            let Value::Str(more) = parse_value(&card[8..]).map_err(|m| format!("CONTINUE: {m}"))?
            else {
                return Err("CONTINUE card without a string".into());
            };
            if let Some((_, Value::Str(s))) = self.cards.last_mut()
                && s.ends_with('&')
            {
                s.pop();
                s.push_str(&more);
            }
            return Ok(());
        }
        if key.is_empty() || &card[8..10] != "= " {
            return Ok(()); // COMMENT, HISTORY, blank: commentary only.
        }
        let value = parse_value(&card[10..]).map_err(|m| format!("keyword {key}: {m}"))?;
        self.cards.push((key.to_string(), value));
        Ok(())
    }

    /// The first value of `key`.
    pub fn get(&self, key: &str) -> Option<&Value> {
        self.cards.iter().find(|(k, _)| k == key).map(|(_, v)| v)
    }

    /// `key` as a string, if present and a string.
    pub fn str(&self, key: &str) -> Option<&str> {
        match self.get(key) {
            Some(Value::Str(s)) => Some(s),
            _ => None,
        }
    }

    /// `key` as a number (integer or real).
    ///
    /// # Errors
    /// If `key` is missing or not a number.
    pub fn f64(&self, key: &str) -> Result<f64, String> {
        match self.get(key) {
            Some(Value::Real(v)) => Ok(*v),
            Some(Value::Int(v)) => Ok(*v as f64),
            Some(v) => Err(format!("keyword {key} is not a number ({v:?})")),
            None => Err(format!("keyword {key} is missing")),
        }
    }

    /// `key` as an integer.
    ///
    /// # Errors
    /// If `key` is missing or not an integer.
    pub fn int(&self, key: &str) -> Result<i64, String> {
        match self.get(key) {
            Some(Value::Int(v)) => Ok(*v),
            Some(v) => Err(format!("keyword {key} is not an integer ({v:?})")),
            None => Err(format!("keyword {key} is missing")),
        }
    }

    /// `key` as a non-negative integer that fits `usize`.
    ///
    /// # Errors
    /// If `key` is missing, not an integer or negative.
    pub fn count(&self, key: &str) -> Result<usize, String> {
        let v = self.int(key)?;
        usize::try_from(v).map_err(|_| format!("keyword {key} must not be negative, got {v}"))
    }
}

/// Fills `block`; `Ok(false)` if the reader was already at its end.
fn read_block(r: &mut impl Read, block: &mut [u8]) -> Result<bool, String> {
    let mut filled = 0;
    while filled < block.len() {
        match r.read(&mut block[filled..]) {
            Ok(0) if filled == 0 => return Ok(false),
            Ok(0) => return Err("file ends inside a header block (truncated)".into()),
            Ok(n) => filled += n,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(format!("cannot read header: {e}")),
        }
    }
    Ok(true)
}

/// Parses the value field (the text after `= `), dropping any `/ comment`.
fn parse_value(field: &str) -> Result<Value, String> {
    let t = field.trim_start();
    if let Some(body) = t.strip_prefix('\'') {
        let mut s = String::new();
        let mut chars = body.chars().peekable();
        while let Some(c) = chars.next() {
            if c == '\'' {
                if chars.peek() == Some(&'\'') {
                    chars.next();
                } else {
                    // Trailing spaces in FITS strings are not significant (§4.2.1.1).
                    return Ok(Value::Str(s.trim_end().to_string()));
                }
            }
            s.push(c);
        }
        return Err("unterminated string".into());
    }
    let v = t.split('/').next().unwrap_or("").trim();
    match v {
        "" => Ok(Value::Undefined),
        "T" => Ok(Value::Logical(true)),
        "F" => Ok(Value::Logical(false)),
        _ => v
            .parse::<i64>()
            .map(Value::Int)
            .or_else(|_| v.replace(['D', 'd'], "E").parse::<f64>().map(Value::Real))
            .map_err(|_| format!("cannot read value '{v}'")),
    }
}

/// Builds header units card by card.
#[derive(Debug, Default)]
pub struct CardWriter {
    text: String,
}

impl CardWriter {
    fn card(&mut self, key: &str, value: &str, comment: &str) {
        debug_assert!(key.len() <= 8);
        let mut card = format!("{key:<8}= {value}");
        if !comment.is_empty() && card.len() + 3 + comment.len() <= CARD {
            card.push_str(" / ");
            card.push_str(comment);
        }
        debug_assert!(card.len() <= CARD, "card too long: {card}");
        self.text.push_str(&format!("{card:<80}"));
    }

    /// A string value; long strings continue on `CONTINUE` cards.
    pub fn str(&mut self, key: &str, value: &str, comment: &str) {
        // 67 characters of quoted text fit a card with the quotes and a trailing `&`.
        let mut pieces = split_escaped(value, 67);
        let last = pieces.pop().unwrap_or_default();
        let mut first = true;
        for piece in pieces {
            self.push_string_card(key, &format!("{piece}&"), first, "");
            first = false;
        }
        self.push_string_card(key, &last, first, comment);
    }

    fn push_string_card(&mut self, key: &str, escaped: &str, first: bool, comment: &str) {
        let quoted = format!("'{escaped:<8}'");
        if first {
            self.card(key, &quoted, comment);
        } else {
            self.text
                .push_str(&format!("{:<80}", format!("CONTINUE  {quoted}")));
        }
    }

    /// An integer value, right-justified in columns 11–30.
    pub fn int(&mut self, key: &str, value: i64, comment: &str) {
        self.card(key, &format!("{value:>20}"), comment);
    }

    /// A real value, written with the shortest digits that read back exactly.
    pub fn real(&mut self, key: &str, value: f64, comment: &str) {
        self.card(key, &format!("{value:>20E}"), comment);
    }

    /// A logical value.
    pub fn logical(&mut self, key: &str, value: bool, comment: &str) {
        self.card(
            key,
            &format!("{:>20}", if value { "T" } else { "F" }),
            comment,
        );
    }

    /// The finished header unit: `END` and space padding to a whole block.
    pub fn finish(mut self) -> Vec<u8> {
        self.text.push_str(&format!("{:<80}", "END"));
        let len = self.text.len().div_ceil(BLOCK) * BLOCK;
        let mut bytes = self.text.into_bytes();
        bytes.resize(len, b' ');
        bytes
    }
}

/// Splits `s` into pieces of at most `max` characters after doubling quotes, never
/// splitting a doubled quote. Non-ASCII characters become `?` (FITS headers are ASCII).
fn split_escaped(s: &str, max: usize) -> Vec<String> {
    let mut pieces = vec![String::new()];
    for c in s.chars() {
        let esc = match c {
            '\'' => "''".to_string(),
            c if c.is_ascii() && !c.is_ascii_control() => c.to_string(),
            _ => "?".to_string(),
        };
        if pieces.last().expect("never empty").len() + esc.len() > max {
            pieces.push(String::new());
        }
        pieces.last_mut().expect("never empty").push_str(&esc);
    }
    pieces
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_parse() {
        assert_eq!(
            parse_value(" 'O''Hara  ' / name"),
            Ok(Value::Str("O'Hara".into()))
        );
        assert_eq!(parse_value("  42 / n"), Ok(Value::Int(42)));
        assert_eq!(parse_value(" -1.5D-3"), Ok(Value::Real(-1.5e-3)));
        assert_eq!(parse_value(" 2.0E2 /x"), Ok(Value::Real(200.0)));
        assert_eq!(parse_value("T"), Ok(Value::Logical(true)));
        assert_eq!(parse_value("   / nothing"), Ok(Value::Undefined));
        assert!(parse_value(" 'open").is_err());
        assert!(parse_value(" 1.2.3").is_err());
    }

    #[test]
    fn written_header_reads_back() {
        let long = "A'long".repeat(30);
        let mut w = CardWriter::default();
        w.logical("SIMPLE", true, "");
        w.str("SRC_NAME", &long, "source");
        w.str("SHORT", "x", "");
        w.int("NAXIS", -3, "count");
        w.real("TBIN", 6.4e-5, "s");
        w.real("BIG", 1.0e300, "");
        let bytes = w.finish();
        assert_eq!(bytes.len() % BLOCK, 0);
        let cards = Cards::read(&mut bytes.as_slice()).unwrap().unwrap();
        assert_eq!(cards.str("SRC_NAME"), Some(long.as_str()));
        assert_eq!(cards.str("SHORT"), Some("x"));
        assert_eq!(cards.int("NAXIS"), Ok(-3));
        assert_eq!(cards.f64("TBIN"), Ok(6.4e-5));
        assert_eq!(cards.f64("BIG"), Ok(1.0e300));
        assert_eq!(cards.get("SIMPLE"), Some(&Value::Logical(true)));
        assert!(cards.count("NAXIS").is_err());
        assert!(Cards::read(&mut &bytes[..100]).is_err());
        assert!(matches!(Cards::read(&mut &b""[..]), Ok(None)));
    }
}

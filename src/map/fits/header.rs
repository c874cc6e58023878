//! The header being written: 80-byte cards, value and string cards in the fixed format, and
//! FITS floats.

use super::{padded, CARD};
use crate::error::{Error, Result};

/// A header being written: 80-byte cards.
#[derive(Default)]
pub(super) struct Header {
    bytes: Vec<u8>,
}

impl Header {
    pub(super) fn push(&mut self, card: [u8; CARD]) {
        self.bytes.extend_from_slice(&card);
    }

    pub(super) fn logical(&mut self, key: &str, v: bool, comment: &str) {
        self.push(card_text(
            key,
            &format!("{:>20}", if v { "T" } else { "F" }),
            comment,
        ));
    }

    pub(super) fn integer(&mut self, key: &str, v: i64, comment: &str) {
        self.push(card_text(key, &format!("{v:>20}"), comment));
    }

    pub(super) fn float(&mut self, key: &str, v: f64, comment: &str) -> Result<()> {
        if !v.is_finite() {
            return Err(Error::input(format!(
                "FITS keyword {key}: value must be finite, got {v}"
            )));
        }
        self.push(card_text(key, &format!("{:>20}", fits_float(v)), comment));
        Ok(())
    }

    pub(super) fn string(&mut self, key: &str, v: &str, comment: &str) -> Result<()> {
        self.push(string_card(key, v, comment)?);
        Ok(())
    }

    pub(super) fn comment(&mut self, text: &str) {
        let mut card = [b' '; CARD];
        card[..7].copy_from_slice(b"COMMENT");
        let text = &text.as_bytes()[..text.len().min(CARD - 8)];
        card[8..8 + text.len()].copy_from_slice(text);
        self.push(card);
    }

    /// Reserves a blank card to be filled in later; returns its byte offset.
    pub(super) fn placeholder(&mut self) -> usize {
        let at = self.bytes.len();
        self.push([b' '; CARD]);
        at
    }

    /// Appends END and pads with spaces to whole blocks.
    pub(super) fn finish(mut self) -> Vec<u8> {
        let mut end = [b' '; CARD];
        end[..3].copy_from_slice(b"END");
        self.push(end);
        let len = padded(self.bytes.len());
        self.bytes.resize(len, b' ');
        self.bytes
    }
}

/// A value card `KEY     = value / comment`, the value field padded to byte 30 as in the fixed
/// format (so astropy, re-rendering a card to verify CHECKSUM, lays it out the same way); a
/// comment too long is cut at a word boundary to fit the 80 bytes.
pub(super) fn card_text(key: &str, value: &str, comment: &str) -> [u8; CARD] {
    debug_assert!(key.len() <= 8 && value.len() <= CARD - 10);
    let mut text = format!("{key:<8}= {value:<20}");
    if !comment.is_empty() && text.len() + 3 < CARD {
        text.push_str(" / ");
        // A comment too long for the card is cut after its last whole word that fits.
        let room = CARD - text.len();
        let cut = match comment.len() <= room {
            true => comment,
            false => comment[..=room]
                .rsplit_once(' ')
                .map_or("", |(head, _)| head),
        };
        text.push_str(cut.trim_end());
    }
    let mut card = [b' '; CARD];
    let n = text.len().min(CARD);
    card[..n].copy_from_slice(&text.as_bytes()[..n]);
    card
}

/// A card with a string value.
pub(super) fn string_card(key: &str, v: &str, comment: &str) -> Result<[u8; CARD]> {
    let value = quoted(v).map_err(|e| Error::input(format!("FITS keyword {key}: {e}")))?;
    Ok(card_text(key, &value, comment))
}

/// A FITS string value: quoted, inner quotes doubled, padded to at least 8 characters.
pub(super) fn quoted(s: &str) -> std::result::Result<String, String> {
    if let Some(c) = s.chars().find(|c| !(' '..='~').contains(c)) {
        return Err(format!("{c:?} is not printable ASCII"));
    }
    let value = format!("'{:<8}'", s.replace('\'', "''"));
    if value.len() > CARD - 10 {
        return Err(format!("string of {} characters is too long", s.len()));
    }
    Ok(value)
}

/// 17 significant digits with a signed two-or-three-digit exponent: `-1.2345678901234567E-05`.
pub(super) fn fits_float(v: f64) -> String {
    let s = format!("{v:.16E}");
    let (mantissa, exponent) = s
        .split_once('E')
        .expect("Rust's {:E} always has an exponent");
    let e: i32 = exponent
        .parse()
        .expect("Rust's {:E} exponent is an integer");
    format!("{mantissa}E{}{:02}", if e < 0 { '-' } else { '+' }, e.abs())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floats_have_17_significant_digits_and_read_back_exactly() {
        assert_eq!(fits_float(1.0), "1.0000000000000000E+00");
        // The nearest double to 2.5e-7 lies below it; Python's '%.16E' % -2.5e-7 agrees.
        assert_eq!(fits_float(-2.5e-7), "-2.4999999999999999E-07");
        assert_eq!(fits_float(-0.25), "-2.5000000000000000E-01");
        assert_eq!(fits_float(1e300), "1.0000000000000001E+300");
        for v in [0.1, -1.0 / 3.0, 6.02214076e23, 5e-324, f64::MAX, -0.0] {
            let s = fits_float(v);
            assert_eq!(s.parse::<f64>().unwrap().to_bits(), v.to_bits(), "{s}");
        }
    }

    #[test]
    fn cards_follow_the_fixed_format() {
        // Fixed format (FITS 4.0 sec. 4.2): '= ' in bytes 9-10, numbers right-justified to
        // byte 30, strings starting at byte 11 with at least 8 characters between quotes.
        let card = card_text("NAXIS1", &format!("{:>20}", 256), "pixels along x");
        let text = std::str::from_utf8(&card).unwrap();
        assert_eq!(&text[..10], "NAXIS1  = ");
        assert_eq!(&text[27..30], "256");
        assert_eq!(&text[30..33], " / ");
        let long = card_text("ERRMED_A", &format!("{:>20}", 1), &"word ".repeat(20));
        let text = std::str::from_utf8(&long).unwrap();
        assert!(text.trim_end().ends_with("word"), "{text}");
        assert_eq!(quoted("rays").unwrap(), "'rays    '");
        assert_eq!(quoted("it's").unwrap(), "'it''s   '");
        assert!(quoted("tab\there").is_err());
        assert!(quoted(&"x".repeat(80)).is_err());
    }
}

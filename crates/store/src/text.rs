//! Text encodings of CSV files: byte-order marks, UTF-16 transcoding, and the explicit
//! Windows-1252 / Latin-1 choices offered when a file is not UTF-8.

use std::borrow::Cow;

use crate::error::{Result, StoreError};

/// The text encoding the analyst chose for a CSV file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Encoding {
    /// UTF-8 (with or without a byte-order mark), or UTF-16 when a UTF-16 byte-order mark
    /// says so. Anything else is refused with a message offering the choices below.
    #[default]
    Auto,
    /// Windows-1252 (the Western European code page of spreadsheet exports).
    Windows1252,
    /// ISO-8859-1 (Latin-1): each byte is the character with that code.
    Latin1,
}

impl Encoding {
    /// Parses `utf-8`/`auto`, `windows-1252`/`cp1252` or `latin1`/`iso-8859-1`.
    pub fn parse(text: &str) -> Result<Self> {
        match text.trim().to_ascii_lowercase().replace('_', "-").as_str() {
            "auto" | "utf-8" | "utf8" => Ok(Encoding::Auto),
            "windows-1252" | "cp1252" | "windows1252" => Ok(Encoding::Windows1252),
            "latin1" | "latin-1" | "iso-8859-1" | "iso8859-1" => Ok(Encoding::Latin1),
            other => Err(StoreError::BadChoice {
                reason: format!(
                    "{other:?} is not an encoding wardcast reads; use utf-8, windows-1252 or latin1"
                ),
            }),
        }
    }
}

/// Decoded text and the name of the encoding found.
#[derive(Debug)]
pub(crate) struct Decoded<'a> {
    pub text: Cow<'a, str>,
    pub encoding: &'static str,
}

/// The 1-based line holding byte offset `at`.
pub(crate) fn line_of(bytes: &[u8], at: usize) -> usize {
    1 + bytes[..at.min(bytes.len())].iter().filter(|&&b| b == b'\n').count()
}

/// Decodes file bytes to UTF-8 text following the chosen encoding.
pub(crate) fn decode(bytes: &[u8], encoding: Encoding) -> Result<Decoded<'_>> {
    match encoding {
        Encoding::Windows1252 => {
            let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
            let (text, _) = encoding_rs::WINDOWS_1252.decode_without_bom_handling(body);
            Ok(Decoded { text, encoding: "windows-1252" })
        }
        Encoding::Latin1 => {
            let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
            let text = if body.is_ascii() {
                // ASCII is valid UTF-8 and identical in Latin-1.
                Cow::Borrowed(std::str::from_utf8(body).unwrap_or_default())
            } else {
                Cow::Owned(body.iter().map(|&b| char::from(b)).collect())
            };
            Ok(Decoded { text, encoding: "latin1" })
        }
        Encoding::Auto => {
            if let Some(body) = bytes.strip_prefix(b"\xFF\xFE") {
                return utf16(body, encoding_rs::UTF_16LE, "utf-16le");
            }
            if let Some(body) = bytes.strip_prefix(b"\xFE\xFF") {
                return utf16(body, encoding_rs::UTF_16BE, "utf-16be");
            }
            let (body, name) = match bytes.strip_prefix(b"\xEF\xBB\xBF") {
                Some(body) => (body, "utf-8 with byte-order mark"),
                None => (bytes, "utf-8"),
            };
            match std::str::from_utf8(body) {
                Ok(text) => Ok(Decoded { text: Cow::Borrowed(text), encoding: name }),
                Err(e) => {
                    let at = e.valid_up_to();
                    Err(StoreError::InvalidUtf8 { line: line_of(body, at), byte: body[at] })
                }
            }
        }
    }
}

fn utf16<'a>(body: &'a [u8], enc: &'static encoding_rs::Encoding, name: &'static str) -> Result<Decoded<'a>> {
    let (text, had_errors) = enc.decode_without_bom_handling(body);
    if had_errors {
        let bad = text.find('\u{FFFD}').unwrap_or(text.len());
        let line = 1 + text[..bad].matches('\n').count();
        return Err(StoreError::InvalidUtf16 { line });
    }
    Ok(Decoded { text: Cow::Owned(text.into_owned()), encoding: name })
}

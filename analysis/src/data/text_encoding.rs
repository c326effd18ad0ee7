//! The character encodings a delimited text file may use.
//!
//! UTF-8 is the default and is checked field by field, so a file saved in an
//! office program's legacy encoding is refused at the first byte that is not
//! UTF-8, with its line and position — never read as garbled text. Latin-1
//! (ISO 8859-1) maps each byte to the code point of the same number; Windows-1252
//! differs from it only in 0x80–0x9F (curly quotes, €, …) and is decoded by
//! `encoding_rs`, the WHATWG Encoding Standard implementation.

use std::borrow::Cow;

/// A text file's character encoding.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum TextEncoding {
    /// UTF-8 (a leading byte-order mark is skipped).
    #[default]
    Utf8,
    /// ISO 8859-1: every byte is the code point of the same number.
    Latin1,
    /// Windows-1252, the usual encoding of office exports in Western Europe
    /// and the Americas.
    Windows1252,
}

impl std::str::FromStr for TextEncoding {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s.to_ascii_lowercase().replace('_', "-").as_str() {
            "utf-8" | "utf8" => Ok(Self::Utf8),
            "latin-1" | "latin1" | "iso-8859-1" | "iso8859-1" => Ok(Self::Latin1),
            "windows-1252" | "cp1252" | "win-1252" => Ok(Self::Windows1252),
            other => Err(format!("unknown encoding `{other}`; use utf-8, latin-1 or windows-1252")),
        }
    }
}

/// Where a field stopped being valid UTF-8.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct InvalidUtf8 {
    /// 1-based position of the offending byte within the field.
    pub byte_in_field: usize,
    /// The offending byte.
    pub byte: u8,
    /// The field with invalid bytes replaced by U+FFFD, for the message.
    pub preview: String,
}

impl TextEncoding {
    /// Decodes one field. ASCII fields — every number — borrow without copying.
    pub(crate) fn decode<'a>(self, field: &'a [u8]) -> Result<Cow<'a, str>, InvalidUtf8> {
        if field.is_ascii() {
            // ASCII is valid in all three encodings and means the same.
            return Ok(Cow::Borrowed(std::str::from_utf8(field).unwrap_or_default()));
        }
        match self {
            TextEncoding::Utf8 => std::str::from_utf8(field).map(Cow::Borrowed).map_err(|e| {
                let at = e.valid_up_to();
                InvalidUtf8 {
                    byte_in_field: at + 1,
                    byte: field[at],
                    preview: String::from_utf8_lossy(field).into_owned(),
                }
            }),
            TextEncoding::Latin1 => Ok(Cow::Owned(field.iter().map(|&b| char::from(b)).collect())),
            TextEncoding::Windows1252 => Ok(encoding_rs::WINDOWS_1252.decode_without_bom_handling(field).0),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn decodes_office_encodings() {
        // 0xE9 is é in both; 0x80 is € in Windows-1252 and U+0080 in Latin-1
        // (code charts of ISO 8859-1 and of Windows-1252).
        assert_eq!(TextEncoding::Latin1.decode(b"Caf\xe9").unwrap(), "Café");
        assert_eq!(TextEncoding::Windows1252.decode(b"\x80 5").unwrap(), "€ 5");
        assert_eq!(TextEncoding::Latin1.decode(b"\x80").unwrap(), "\u{80}");
        let bad = TextEncoding::Utf8.decode(b"Caf\xe9 Row").unwrap_err();
        assert_eq!((bad.byte_in_field, bad.byte), (4, 0xE9));
        assert_eq!(bad.preview, "Caf\u{fffd} Row");
    }
}

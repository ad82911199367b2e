//! Turning file bytes into text: UTF-8 (with or without byte-order mark), UTF-16 with a
//! byte-order mark, and a Windows-1252 fallback for bytes that are not valid UTF-8. The
//! encoding used is reported so the user can see it. Binary files are refused here.

use std::borrow::Cow;

use crate::error::{Error, ErrorKind, Result, Where};

/// The text encoding a file was read with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Encoding {
    Utf8,
    Utf8WithBom,
    Utf16Le,
    Utf16Be,
    Windows1252,
}

impl Encoding {
    /// The name shown to users and written to JSON.
    pub fn label(self) -> &'static str {
        match self {
            Encoding::Utf8 => "utf-8",
            Encoding::Utf8WithBom => "utf-8 with BOM",
            Encoding::Utf16Le => "utf-16le",
            Encoding::Utf16Be => "utf-16be",
            Encoding::Windows1252 => "windows-1252",
        }
    }
}

/// Decodes `bytes` into text. UTF-8 input is borrowed, not copied.
pub fn decode(bytes: &[u8]) -> Result<(Cow<'_, str>, Encoding)> {
    if let Some(rest) = bytes.strip_prefix(b"\xEF\xBB\xBF") {
        return Ok(match std::str::from_utf8(rest) {
            Ok(text) => (Cow::Borrowed(text), Encoding::Utf8WithBom),
            Err(_) => (Cow::Owned(windows_1252(rest)), Encoding::Windows1252),
        });
    }
    if let Some(rest) = bytes.strip_prefix(b"\xFF\xFE") {
        return utf16(rest, u16::from_le_bytes).map(|t| (Cow::Owned(t), Encoding::Utf16Le));
    }
    if let Some(rest) = bytes.strip_prefix(b"\xFE\xFF") {
        return utf16(rest, u16::from_be_bytes).map(|t| (Cow::Owned(t), Encoding::Utf16Be));
    }
    refuse_binary(bytes)?;
    match std::str::from_utf8(bytes) {
        Ok(text) => Ok((Cow::Borrowed(text), Encoding::Utf8)),
        Err(_) => Ok((Cow::Owned(windows_1252(bytes)), Encoding::Windows1252)),
    }
}

/// Refuses input whose start is mostly control bytes: images, archives, executables renamed
/// .csv. A stray NUL or two in a text file is tolerated (the reader drops them later).
fn refuse_binary(bytes: &[u8]) -> Result<()> {
    const SIGNATURES: [(&[u8], &str); 7] = [
        (b"\x89PNG", "a PNG image"),
        (b"%PDF", "a PDF document"),
        (b"GIF8", "a GIF image"),
        (b"\xFF\xD8\xFF", "a JPEG image"),
        (b"\x1F\x8B", "a gzip archive"),
        (b"\x7FELF", "a program"),
        (b"MZ", "a Windows program"),
    ];
    let head = &bytes[..bytes.len().min(64 * 1024)];
    let is_control = |b: u8| b < 0x20 && !matches!(b, b'\t' | b'\n' | b'\r' | 0x0c);
    let controls = head.iter().filter(|&&b| is_control(b)).count();
    let signature = SIGNATURES.iter().find(|(magic, _)| head.starts_with(magic));
    // Text may hold a stray control byte; binary data holds about one in eight.
    if signature.is_none() && controls * 10 <= head.len() {
        return Ok(());
    }
    let first = head.iter().position(|&b| is_control(b)).unwrap_or(0);
    let reason = if let Some((_, what)) = signature {
        format!("it starts like {what}")
    } else {
        format!(
            "{:.0}% of its first {} bytes are control characters",
            100.0 * controls as f64 / head.len() as f64,
            head.len()
        )
    };
    Err(Error::new(ErrorKind::NotText {
        at: Where {
            byte: Some(first as u64),
            ..Where::default()
        },
        reason,
    }))
}

fn utf16(bytes: &[u8], unit: fn([u8; 2]) -> u16) -> Result<String> {
    let units = bytes.chunks_exact(2).map(|pair| unit([pair[0], pair[1]]));
    let mut text = String::with_capacity(bytes.len() / 2);
    for (i, decoded) in char::decode_utf16(units).enumerate() {
        match decoded {
            Ok(c) => text.push(c),
            Err(_) => {
                return Err(Error::new(ErrorKind::NotText {
                    at: Where {
                        byte: Some(2 + 2 * i as u64),
                        ..Where::default()
                    },
                    reason: "the file says it is UTF-16 but has a broken character here"
                        .to_string(),
                }))
            }
        }
    }
    if bytes.len() % 2 == 1 {
        return Err(Error::new(ErrorKind::NotText {
            at: Where {
                byte: Some(bytes.len() as u64 + 1),
                ..Where::default()
            },
            reason: "the file says it is UTF-16 but ends in half a character (it may be cut short)"
                .to_string(),
        }));
    }
    Ok(text)
}

/// Windows-1252: Latin-1 except 0x80..=0x9F, which hold typographic characters. The five
/// unassigned bytes map to the same-numbered control characters (as WHATWG's decoder does).
fn windows_1252(bytes: &[u8]) -> String {
    const HIGH: [char; 32] = [
        '€', '\u{81}', '‚', 'ƒ', '„', '…', '†', '‡', 'ˆ', '‰', 'Š', '‹', 'Œ', '\u{8D}', 'Ž',
        '\u{8F}', '\u{90}', '‘', '’', '“', '”', '•', '–', '—', '˜', '™', 'š', '›', 'œ', '\u{9D}',
        'ž', 'Ÿ',
    ];
    bytes
        .iter()
        .map(|&b| match b {
            0x80..=0x9F => HIGH[(b - 0x80) as usize],
            _ => b as char,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn encodings_are_recognised() {
        // Byte-order marks as defined by the Unicode Standard, section 23.8.
        let check = |bytes: &[u8], text: &str, enc: Encoding| {
            let (got, got_enc) = decode(bytes).unwrap();
            assert_eq!((got.as_ref(), got_enc), (text, enc));
        };
        check(b"a,b\n", "a,b\n", Encoding::Utf8);
        check(b"\xEF\xBB\xBFa\n", "a\n", Encoding::Utf8WithBom);
        check(b"\xFF\xFEa\x00\xE9\x00", "a\u{e9}", Encoding::Utf16Le);
        check(b"\xFE\xFF\x00a\x00\xE9", "a\u{e9}", Encoding::Utf16Be);
        // Windows-1252 code chart (Microsoft): 0xE9 = é, 0x80 = €, 0xA3 = £.
        check(b"caf\xE9 \x80 \xA3", "café € £", Encoding::Windows1252);
    }

    #[test]
    fn binary_is_refused_with_a_position() {
        let png = b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR\x00\x00\x00\x10\x00\x00\x00\x10\x08\x06";
        let err = decode(png).unwrap_err();
        assert!(err.to_string().contains("PNG"), "{err}");
        assert!(decode(b"\xFF\xFEa").is_err(), "odd UTF-16 length");
    }
}

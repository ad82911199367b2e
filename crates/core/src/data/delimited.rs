//! Delimited text (CSV, TSV, semicolon, pipe): guessing the delimiter and the decimal mark,
//! and splitting text into records following RFC 4180 (double-quoted fields may hold
//! delimiters, doubled quotes and line breaks; CRLF, LF or CR end a record).
//!
//! The splitter is a small hand-written state machine over bytes rather than a library, so
//! that every error can name the physical line where a record or an unclosed quote started.

use crate::error::{Error, ErrorKind, Result, Where};

/// One record: the unescaped text of its fields, stored end to end in one buffer.
#[derive(Debug, Default, Clone)]
pub struct Record {
    text: String,
    ends: Vec<usize>,
    /// Physical line (1-based) where the record starts.
    pub line: u64,
    /// Byte offset where the record starts.
    pub byte: u64,
}

impl Record {
    pub fn len(&self) -> usize {
        self.ends.len()
    }
    pub fn is_empty(&self) -> bool {
        self.ends.is_empty()
    }
    pub fn field(&self, i: usize) -> &str {
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        &self.text[start..self.ends[i]]
    }
    pub fn fields(&self) -> impl Iterator<Item = &str> {
        (0..self.len()).map(|i| self.field(i))
    }
    /// True for a line holding nothing at all (skipped, as most readers do).
    fn is_blank(&self) -> bool {
        self.ends.len() == 1 && self.ends[0] == 0
    }
}

/// Splits text into records.
pub struct Splitter<'a> {
    data: &'a [u8],
    pos: usize,
    line: u64,
    delimiter: u8,
    /// Bytes that end an unquoted run: the delimiter, CR, LF and NUL.
    stop: [bool; 256],
}

impl<'a> Splitter<'a> {
    pub fn new(text: &'a str, delimiter: u8) -> Self {
        debug_assert!(delimiter.is_ascii() && delimiter != b'"');
        let mut stop = [false; 256];
        for b in [delimiter, b'\n', b'\r', 0] {
            stop[b as usize] = true;
        }
        Splitter {
            data: text.as_bytes(),
            pos: 0,
            line: 1,
            delimiter,
            stop,
        }
    }

    /// Bytes consumed so far.
    pub fn position(&self) -> usize {
        self.pos
    }

    /// Reads the next non-blank record into `record`; `Ok(false)` at the end of the text.
    pub fn next_record(&mut self, record: &mut Record) -> Result<bool> {
        loop {
            if self.pos >= self.data.len() {
                return Ok(false);
            }
            self.read_one(record)?;
            if !record.is_blank() {
                return Ok(true);
            }
        }
    }

    fn read_one(&mut self, record: &mut Record) -> Result<()> {
        let data = self.data;
        let delim = self.delimiter;
        record.line = self.line;
        record.byte = self.pos as u64;
        record.ends.clear();
        // Work on bytes; every byte pushed comes from valid UTF-8 and boundaries fall on
        // ASCII bytes, so the buffer stays valid UTF-8.
        let mut buf = std::mem::take(&mut record.text).into_bytes();
        buf.clear();
        let mut i = self.pos;
        let stop = &self.stop;
        loop {
            // Start of a field.
            if i < data.len() && data[i] == b'"' {
                let quote_line = self.line;
                let quote_byte = i;
                i += 1;
                loop {
                    let Some(offset) = data[i..].iter().position(|&b| b == b'"') else {
                        return Err(Error::new(ErrorKind::UnclosedQuote {
                            at: Where {
                                line: Some(quote_line),
                                byte: Some(quote_byte as u64),
                                ..Where::default()
                            },
                        }));
                    };
                    let chunk = &data[i..i + offset];
                    self.line += count_line_breaks(chunk);
                    buf.extend_from_slice(chunk);
                    i += offset + 1;
                    if i < data.len() && data[i] == b'"' {
                        buf.push(b'"');
                        i += 1;
                    } else {
                        break;
                    }
                }
                // Text after the closing quote and before the delimiter is kept as it is
                // (lenient, like most readers) rather than refused.
            }
            // Unquoted part of the field: copy whole runs up to the next stop byte.
            loop {
                let run = data[i..]
                    .iter()
                    .position(|&b| stop[b as usize])
                    .unwrap_or(data.len() - i);
                buf.extend_from_slice(&data[i..i + run]);
                i += run;
                if i < data.len() && data[i] == 0 {
                    i += 1; // NUL bytes are dropped
                    continue;
                }
                break;
            }
            record.ends.push(buf.len());
            if i >= data.len() {
                break;
            }
            let b = data[i];
            i += 1;
            if b == delim {
                continue;
            }
            // A line break ends the record: CRLF, LF or a lone CR.
            if b == b'\r' && i < data.len() && data[i] == b'\n' {
                i += 1;
            }
            self.line += 1;
            break;
        }
        self.pos = i;
        // NUL bytes were dropped above; everything else is unchanged UTF-8.
        record.text = String::from_utf8(buf)
            .unwrap_or_else(|e| String::from_utf8_lossy(e.as_bytes()).into_owned());
        Ok(())
    }
}

fn count_line_breaks(chunk: &[u8]) -> u64 {
    let mut n = 0;
    for (k, &b) in chunk.iter().enumerate() {
        if b == b'\n' || (b == b'\r' && chunk.get(k + 1) != Some(&b'\n')) {
            n += 1;
        }
    }
    n
}

/// The delimiters we look for, in order of preference when the evidence is equal.
pub const CANDIDATES: [u8; 4] = [b',', b';', b'\t', b'|'];

/// Guesses the delimiter from the first records of `text`: the candidate that splits the
/// most records into the same number (> 1) of fields. `hint` (from a .tsv name, say) wins
/// ties. A file with one column gives `None`.
pub fn sniff_delimiter(text: &str, hint: Option<u8>) -> Option<u8> {
    let sample = prefix(text, 64 * 1024);
    let mut best: Option<(usize, usize, u8)> = None; // (records agreeing, fields, delimiter)
    let mut order: Vec<u8> = CANDIDATES.to_vec();
    if let Some(h) = hint {
        order.retain(|&d| d != h);
        order.insert(0, h);
    }
    for &delim in &order {
        let mut splitter = Splitter::new(sample, delim);
        let mut record = Record::default();
        let mut counts = Vec::new();
        while counts.len() < 50 {
            match splitter.next_record(&mut record) {
                Ok(true) => counts.push(record.len()),
                // A sample may cut a quoted field in two; judge on what was read.
                Ok(false) | Err(_) => break,
            }
        }
        // Ignore the last record when the sample was cut short: it may be partial.
        if sample.len() < text.len() && counts.len() > 1 {
            counts.pop();
        }
        let Some(&header) = counts.first() else {
            continue;
        };
        if header < 2 {
            continue;
        }
        let agreeing = counts.iter().filter(|&&c| c == header).count();
        let better = match best {
            None => true,
            Some((a, f, _)) => agreeing > a || (agreeing == a && header > f && hint.is_none()),
        };
        if better {
            best = Some((agreeing, header, delim));
        }
    }
    best.map(|(_, _, d)| d)
}

/// Guesses whether numbers use a decimal comma: only possible when the delimiter is not a
/// comma, and decided by which form (`3,5` or `3.5`) is more common in the sample.
pub fn sniff_decimal_comma(text: &str, delimiter: u8) -> bool {
    if delimiter == b',' {
        return false;
    }
    let sample = prefix(text, 64 * 1024);
    let mut splitter = Splitter::new(sample, delimiter);
    let mut record = Record::default();
    let (mut comma, mut point) = (0usize, 0usize);
    let mut n = 0;
    while n < 200 && matches!(splitter.next_record(&mut record), Ok(true)) {
        n += 1;
        for field in record.fields() {
            match decimal_form(field.trim()) {
                Some(b',') => comma += 1,
                Some(b'.') => point += 1,
                _ => {}
            }
        }
    }
    comma > point
}

/// `Some(mark)` when `s` looks like digits, one `mark`, digits (`12,5` or `12.5`).
fn decimal_form(s: &str) -> Option<u8> {
    let s = s.strip_prefix('-').unwrap_or(s);
    let b = s.as_bytes();
    let at = b.iter().position(|&c| c == b',' || c == b'.')?;
    let (int, frac) = (&b[..at], &b[at + 1..]);
    let digits = |p: &[u8]| !p.is_empty() && p.iter().all(|c| c.is_ascii_digit());
    // "1.234" could be a thousands group; count only forms that cannot be.
    if digits(int) && digits(frac) && frac.len() != 3 {
        Some(b[at])
    } else {
        None
    }
}

/// The longest prefix of `text` of at most `max` bytes that ends on a character boundary.
fn prefix(text: &str, max: usize) -> &str {
    if text.len() <= max {
        return text;
    }
    let mut end = max;
    while !text.is_char_boundary(end) {
        end -= 1;
    }
    &text[..end]
}

#[cfg(test)]
mod tests {
    use super::*;

    fn split(text: &str, delim: u8) -> Result<Vec<Vec<String>>> {
        let mut s = Splitter::new(text, delim);
        let mut r = Record::default();
        let mut out = Vec::new();
        while s.next_record(&mut r)? {
            out.push(r.fields().map(str::to_string).collect());
        }
        Ok(out)
    }

    #[test]
    fn rfc_4180_examples() {
        // RFC 4180, section 2, rules 1-7, with the examples given there.
        let rows = |t: &str| split(t, b',').unwrap();
        // Rule 1: CRLF line breaks. Rule 2: the last record may lack a line break.
        assert_eq!(
            rows("aaa,bbb,ccc\r\nzzz,yyy,xxx"),
            [["aaa", "bbb", "ccc"], ["zzz", "yyy", "xxx"]]
        );
        // Rule 3: a header line in the same format.
        assert_eq!(rows("field_name,field_name\r\naaa,bbb\r\n").len(), 2);
        // Rule 5: fields may be enclosed in double quotes.
        assert_eq!(rows("\"aaa\",\"bbb\",\"ccc\"\r\n"), [["aaa", "bbb", "ccc"]]);
        // Rule 6: quoted fields may hold line breaks, double quotes and commas.
        assert_eq!(
            rows("\"aaa\",\"b\r\nbb\",\"ccc\"\r\nzzz,yyy,xxx"),
            [vec!["aaa", "b\r\nbb", "ccc"], vec!["zzz", "yyy", "xxx"]]
        );
        // Rule 7: a double quote inside a quoted field is written twice.
        assert_eq!(
            rows("\"aaa\",\"b\"\"bb\",\"ccc\""),
            [["aaa", "b\"bb", "ccc"]]
        );
        assert_eq!(rows("a,\"x, y\",c\n"), [["a", "x, y", "c"]]);
    }

    #[test]
    fn line_numbers_count_embedded_breaks() {
        let mut s = Splitter::new("h1,h2\n\"a\nb\",c\n\nd,e\n", b',');
        let mut r = Record::default();
        let mut lines = Vec::new();
        while s.next_record(&mut r).unwrap() {
            lines.push(r.line);
        }
        assert_eq!(lines, [1, 2, 5]);
    }

    #[test]
    fn unclosed_quote_names_its_line() {
        let err = split("a,b\n1,2\n3,\"oops\n4,5\n", b',').unwrap_err();
        assert_eq!(err.location().and_then(|w| w.line), Some(3));
    }

    #[test]
    fn delimiter_and_decimal_sniffing() {
        assert_eq!(sniff_delimiter("a,b,c\n1,2,3\n", None), Some(b','));
        assert_eq!(sniff_delimiter("a;b;c\n1,5;2;3\n", None), Some(b';'));
        assert_eq!(sniff_delimiter("a\tb\n1\t2\n", None), Some(b'\t'));
        assert_eq!(sniff_delimiter("a|b\n1|2\n", None), Some(b'|'));
        assert_eq!(sniff_delimiter("\"x,y\";b\n\"1,2\";3\n", None), Some(b';'));
        assert_eq!(sniff_delimiter("only\n1\n2\n", None), None);
        assert!(sniff_decimal_comma("a;b\n3,5;1,25\n", b';'));
        assert!(!sniff_decimal_comma("a;b\n3.5;1.25\n", b';'));
    }
}

//! The entry point of the data layer: [`read_table`] turns file bytes into a typed [`Table`],
//! whatever the format, and reports how it read them ([`Source`]) and anything the user
//! should know ([`Loaded::notices`]).

use sha2::{Digest, Sha256};

use super::columns::{self, Builder, Plan};
use super::decode::{decode, Encoding};
use super::delimited::{sniff_decimal_comma, sniff_delimiter, Record, Splitter, CANDIDATES};
use super::spreadsheet;
use super::values::{MissingTokens, NumberStyle};
use super::{Kind, Table};
use crate::error::{Error, ErrorKind, Result, Where};
use crate::progress::{Flow, Progress};

/// Settings for reading one file.
#[derive(Debug, Clone, Default)]
pub struct ReadOptions {
    /// The file's name, for hints only (`.tsv` prefers tabs).
    pub file_name: Option<String>,
    /// Spreadsheet sheet to read; the first sheet when `None`.
    pub sheet: Option<String>,
    /// Extra missing-value tokens besides the defaults (e.g. `-999`), matched exactly.
    pub missing_tokens: Vec<String>,
    /// Kinds chosen by the user, by column name (after renaming).
    pub kinds: Vec<(String, Kind)>,
    /// Refuse files larger than this many bytes (`None`: no limit).
    pub max_bytes: Option<u64>,
    /// The SHA-256 of the bytes when the caller already has it (the page uses the browser's
    /// own, much faster than SHA-256 in wasm); computed here when `None`.
    pub fingerprint: Option<String>,
}

/// How the file was read.
#[derive(Debug, Clone, PartialEq)]
pub enum Source {
    Delimited {
        delimiter: u8,
        encoding: Encoding,
        decimal: u8,
    },
    Spreadsheet {
        format: &'static str,
        sheet: String,
        sheets: Vec<String>,
    },
}

impl Source {
    /// A one-line description for people: "comma-separated, utf-8, decimal point".
    pub fn describe(&self) -> String {
        match self {
            Source::Delimited {
                delimiter,
                encoding,
                decimal,
            } => format!(
                "{}, {}, decimal {}",
                delimiter_name(*delimiter),
                encoding.label(),
                if *decimal == b',' { "comma" } else { "point" }
            ),
            Source::Spreadsheet {
                format,
                sheet,
                sheets,
            } => {
                format!(
                    "{format} spreadsheet, sheet '{sheet}' (of {})",
                    sheets.len()
                )
            }
        }
    }
}

/// A human name for a delimiter byte.
pub fn delimiter_name(d: u8) -> &'static str {
    match d {
        b',' => "comma-separated",
        b';' => "semicolon-separated",
        b'\t' => "tab-separated",
        b'|' => "pipe-separated",
        _ => "delimited",
    }
}

/// A table read from a file, with what is known about the reading.
#[derive(Debug, Clone)]
pub struct Loaded {
    pub table: Table,
    pub source: Source,
    pub notices: Vec<String>,
    /// SHA-256 of the file bytes, lowercase hex (FIPS 180-4).
    pub fingerprint: String,
    pub bytes: u64,
}

/// SHA-256 of `bytes` as lowercase hex.
pub fn fingerprint(bytes: &[u8]) -> String {
    let digest = Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

/// Reads a CSV/TSV/delimited text file or an xlsx/ods/xls workbook into a table.
pub fn read_table(
    bytes: &[u8],
    options: &ReadOptions,
    progress: &mut dyn Progress,
) -> Result<Loaded> {
    if let Some(limit) = options.max_bytes {
        if bytes.len() as u64 > limit {
            return Err(ErrorKind::TooBig {
                bytes: bytes.len() as u64,
                limit,
            }
            .into());
        }
    }
    if bytes.is_empty() {
        return Err(ErrorKind::EmptyFile.into());
    }
    for token in &options.missing_tokens {
        if token.contains(['\n', '\r']) {
            return Err(ErrorKind::BadSetting {
                setting: format!("missing-value token {token:?}"),
                reason: "a token cannot contain a line break".into(),
            }
            .into());
        }
    }
    let fingerprint = match &options.fingerprint {
        Some(known) => known.clone(),
        None => fingerprint(bytes),
    };
    let missing = MissingTokens::new(&options.missing_tokens);
    let (table, source, notices) = if spreadsheet::looks_like_workbook(bytes) {
        spreadsheet::read(bytes, options, &missing, progress)?
    } else {
        read_delimited(bytes, options, &missing, progress)?
    };
    Ok(Loaded {
        table,
        source,
        notices,
        fingerprint,
        bytes: bytes.len() as u64,
    })
}

/// Turns raw header cells into unique, non-blank names, noting every change.
pub(crate) fn clean_names(raw: Vec<String>, notices: &mut Vec<String>) -> Vec<String> {
    let originals: Vec<String> = raw.iter().map(|n| n.trim().to_string()).collect();
    let taken = |names: &[String], c: &String| names.contains(c) || originals.contains(c);
    let mut names: Vec<String> = Vec::with_capacity(raw.len());
    for (i, name) in raw.into_iter().enumerate() {
        let trimmed = name.trim().to_string();
        let mut candidate = if trimmed.is_empty() {
            format!("column_{}", i + 1)
        } else {
            trimmed.clone()
        };
        if names.contains(&candidate) {
            let mut k = 2;
            while taken(&names, &format!("{candidate}_{k}")) {
                k += 1;
            }
            candidate = format!("{candidate}_{k}");
        }
        if trimmed.is_empty() {
            notices.push(format!(
                "column {} has no name: renamed '{candidate}'",
                i + 1
            ));
        } else if candidate != trimmed {
            notices.push(format!(
                "column {} repeats the name '{trimmed}': renamed '{candidate}'",
                i + 1
            ));
        }
        names.push(candidate);
    }
    names
}

/// The reading plan of each column from the user's chosen kinds.
pub(crate) fn plans(
    names: &[String],
    options: &ReadOptions,
    notices: &mut Vec<String>,
) -> Vec<Plan> {
    for (name, _) in &options.kinds {
        if !names.contains(name) {
            notices.push(format!(
                "a kind was chosen for column '{name}', which this file does not have"
            ));
        }
    }
    names
        .iter()
        .map(|n| match options.kinds.iter().find(|(k, _)| k == n) {
            Some((_, kind)) => Plan::Kind(*kind),
            None => Plan::Infer,
        })
        .collect()
}

fn read_delimited(
    bytes: &[u8],
    options: &ReadOptions,
    missing: &MissingTokens,
    progress: &mut dyn Progress,
) -> Result<(Table, Source, Vec<String>)> {
    let mut notices = Vec::new();
    let (text, encoding) = decode(bytes)?;
    let text: &str = &text;
    let hint = options.file_name.as_deref().and_then(|n| {
        let lower = n.to_ascii_lowercase();
        (lower.ends_with(".tsv") || lower.ends_with(".tab")).then_some(b'\t')
    });
    let delimiter = sniff_delimiter(text, hint).unwrap_or_else(|| {
        // One column: pick a delimiter that never occurs, so values stay whole.
        let head = &text.as_bytes()[..text.len().min(64 * 1024)];
        CANDIDATES
            .into_iter()
            .find(|d| !head.contains(d))
            .unwrap_or(b',')
    });
    let style = if sniff_decimal_comma(text, delimiter) {
        NumberStyle::COMMA
    } else {
        NumberStyle::POINT
    };
    if text.contains('\0') {
        notices.push(
            "the file contains NUL bytes (often a sign of a damaged export); they were dropped"
                .into(),
        );
    }

    let mut splitter = Splitter::new(text, delimiter);
    let mut record = Record::default();
    if !splitter.next_record(&mut record)? {
        return Err(ErrorKind::EmptyFile.into());
    }
    let names = clean_names(record.fields().map(str::to_string).collect(), &mut notices);
    let ncols = names.len();
    let plans = plans(&names, options, &mut notices);
    // Reserve for the expected number of rows, judged from the length of the first data
    // records, so the column vectors neither grow and copy nor hold much unused room (in
    // wasm, reserved room is real memory).
    let body_start = splitter.position();
    let estimate = estimate_rows(&text[body_start..], delimiter);
    let mut builders: Vec<Builder> = plans
        .iter()
        .map(|&p| Builder::new(p, style, estimate))
        .collect();
    let mut rows = 0usize;
    let mut trailing_extra = 0usize;
    let total = text.len() as u64;
    loop {
        let batch = read_batch(
            &mut splitter,
            &mut record,
            &mut builders,
            missing,
            &mut trailing_extra,
        )?;
        rows += batch;
        if batch < BATCH {
            break;
        }
        if progress.step("reading", splitter.position() as u64, total) == Flow::Stop {
            return Err(ErrorKind::Cancelled.into());
        }
    }
    if rows == 0 {
        return Err(ErrorKind::NoDataRows { columns: ncols }.into());
    }
    if trailing_extra > 0 {
        notices.push(format!(
            "{trailing_extra} row(s) end with extra empty fields beyond the header's {ncols}; \
             they were ignored"
        ));
    }

    // Second pass for the columns whose first guess was wrong.
    let (again, mut second) = columns::second_pass(&builders, style, rows);
    if !again.is_empty() {
        let mut splitter = Splitter::new(&text[body_start..], delimiter);
        let mut done = 0usize;
        while splitter.next_record(&mut record)? {
            for (builder, &col) in second.iter_mut().zip(&again) {
                builder.push_text(record.field(col), missing);
            }
            done += 1;
            if done.is_multiple_of(BATCH)
                && progress.step(
                    "reading mixed columns again",
                    splitter.position() as u64,
                    total,
                ) == Flow::Stop
            {
                return Err(ErrorKind::Cancelled.into());
            }
        }
        columns::replace(&mut builders, again, second);
    }
    progress.step("reading", total, total);
    let table = finish(builders, names, rows, &mut notices);
    Ok((
        table,
        Source::Delimited {
            delimiter,
            encoding,
            decimal: style.decimal,
        },
        notices,
    ))
}

/// Records read between two progress reports.
const BATCH: usize = 8192;

/// Reads up to [`BATCH`] records into the builders; returns how many it read. A function of
/// its own, not inlined, so that a browser's wasm engine, which optimises a function only
/// for its later calls, runs all but the first batch in optimised code.
#[inline(never)]
fn read_batch(
    splitter: &mut Splitter<'_>,
    record: &mut Record,
    builders: &mut [Builder],
    missing: &MissingTokens,
    trailing_extra: &mut usize,
) -> Result<usize> {
    let ncols = builders.len();
    for n in 0..BATCH {
        if !splitter.next_record(record)? {
            return Ok(n);
        }
        check_width(record, ncols, trailing_extra)?;
        for (b, builder) in builders.iter_mut().enumerate() {
            builder.push_text(record.field(b), missing);
        }
    }
    Ok(BATCH)
}

/// Expected number of records in `body`, from the mean length of its first records (5%
/// spare).
fn estimate_rows(body: &str, delimiter: u8) -> usize {
    let mut splitter = Splitter::new(body, delimiter);
    let mut record = Record::default();
    let mut n = 0usize;
    while n < 200 && matches!(splitter.next_record(&mut record), Ok(true)) {
        n += 1;
    }
    if n == 0 {
        return 0;
    }
    let mean = splitter.position().max(1) as f64 / n as f64;
    ((body.len() as f64 / mean) * 1.05) as usize + 16
}

/// A record must have as many fields as the header; extra empty fields at the end (left by
/// some spreadsheet exports) are tolerated and counted.
fn check_width(record: &Record, ncols: usize, trailing_extra: &mut usize) -> Result<()> {
    let n = record.len();
    if n == ncols {
        return Ok(());
    }
    if n > ncols && (ncols..n).all(|i| record.field(i).trim().is_empty()) {
        *trailing_extra += 1;
        return Ok(());
    }
    Err(Error::new(ErrorKind::RaggedRow {
        at: Where {
            line: Some(record.line),
            byte: Some(record.byte),
            ..Where::default()
        },
        found: n,
        expected: ncols,
    }))
}

pub(crate) fn finish(
    builders: Vec<Builder>,
    names: Vec<String>,
    rows: usize,
    notices: &mut Vec<String>,
) -> Table {
    let columns = builders
        .into_iter()
        .zip(names)
        .map(|(builder, name)| {
            let (column, mut notes) = builder.finish(name);
            notices.append(&mut notes);
            column
        })
        .collect();
    Table { columns, rows }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::Values;
    use crate::progress::Silent;

    fn read(text: &[u8]) -> Result<Loaded> {
        read_table(text, &ReadOptions::default(), &mut Silent)
    }

    #[test]
    fn a_small_csv() {
        let t =
            read(b"id,age,smoker,ward\r\nA1,54,yes,Birch\r\nA2,NA,no,Cedar\r\nA3,61,no,Birch\r\n")
                .unwrap();
        assert_eq!(t.table.rows, 3);
        let kinds: Vec<_> = t.table.columns.iter().map(|c| c.kind).collect();
        assert_eq!(
            kinds,
            [
                Kind::Category,
                Kind::WholeNumber,
                Kind::YesNo,
                Kind::Category
            ]
        );
        assert_eq!(
            t.table.columns[2].values,
            Values::Numbers(vec![1.0, 0.0, 0.0])
        );
        assert!(t.table.columns[1].values.is_missing(1));
        // SHA-256 from Python's hashlib.sha256 (FIPS 180-4) of the same bytes.
        assert_eq!(t.fingerprint.len(), 64);
    }

    #[test]
    fn fingerprint_matches_fips_180_4_example() {
        // FIPS 180-2 appendix B.1: SHA-256("abc").
        assert_eq!(
            fingerprint(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn semicolons_and_decimal_commas() {
        let t = read(b"a;b\n3,5;1\n4,25;2\n").unwrap();
        assert_eq!(t.table.columns[0].values, Values::Numbers(vec![3.5, 4.25]));
        assert_eq!(
            t.source,
            Source::Delimited {
                delimiter: b';',
                encoding: Encoding::Utf8,
                decimal: b','
            }
        );
    }

    #[test]
    fn ragged_rows_name_the_line() {
        let err = read(b"a,b,c\n1,2,3\n4,5\n").unwrap_err();
        let msg = err.to_string();
        assert!(
            msg.contains("line 3") && msg.contains("2 field") && msg.contains("3"),
            "{msg}"
        );
    }

    #[test]
    fn bad_files_give_messages_not_panics() {
        assert!(matches!(
            read(b"").unwrap_err().kind(),
            ErrorKind::EmptyFile
        ));
        assert!(matches!(
            read(b"a,b\n").unwrap_err().kind(),
            ErrorKind::NoDataRows { columns: 2 }
        ));
        assert!(matches!(
            read(b"\n\n\n").unwrap_err().kind(),
            ErrorKind::EmptyFile
        ));
    }

    #[test]
    fn names_are_cleaned() {
        let t = read(b"a,,a,a_2\n1,2,3,4\n").unwrap();
        let names: Vec<_> = t.table.columns.iter().map(|c| c.name.as_str()).collect();
        assert_eq!(names, ["a", "column_2", "a_3", "a_2"]);
        assert_eq!(
            t.notices.iter().filter(|n| n.contains("renamed")).count(),
            2
        );
    }

    #[test]
    fn mixed_column_read_twice() {
        let t = read(b"x,y\n1,a\n2,b\nmany,c\n").unwrap();
        assert_eq!(t.table.columns[0].kind, Kind::Category);
        assert!(
            t.notices.iter().any(|n| n.contains("mixes numbers")),
            "{:?}",
            t.notices
        );
    }

    #[test]
    fn user_tokens_and_chosen_kinds() {
        let options = ReadOptions {
            missing_tokens: vec!["-999".into()],
            kinds: vec![("code".into(), Kind::Category)],
            ..ReadOptions::default()
        };
        let t = read_table(b"v,code\n1,10\n-999,20\n", &options, &mut Silent).unwrap();
        assert!(t.table.columns[0].values.is_missing(1));
        assert_eq!(t.table.columns[1].kind, Kind::Category);
    }
}

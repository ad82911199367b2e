//! The one error type of spinney-core: `Error(Box<ErrorKind>)`. Every error caused by user
//! data says where it happened ([`Where`]: line, column, byte) and what to do about it.
//! Nothing in this crate panics on user data (ARCHITECTURE.md, invariant 6).

use std::fmt;

/// A position in the user's input. Lines and columns are 1-based, as editors show them.
#[derive(Debug, Clone, Default, PartialEq, Eq, serde::Serialize)]
pub struct Where {
    /// Physical line of the file (counting embedded newlines inside quotes).
    pub line: Option<u64>,
    /// Record number, 1 = the header row.
    pub record: Option<u64>,
    /// Column name or number, as the user sees it.
    pub column: Option<String>,
    /// Byte offset from the start of the file.
    pub byte: Option<u64>,
}

impl fmt::Display for Where {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let mut parts = Vec::new();
        if let Some(line) = self.line {
            parts.push(format!("line {line}"));
        }
        if let Some(column) = &self.column {
            parts.push(format!("column '{column}'"));
        }
        if let Some(byte) = self.byte {
            parts.push(format!("byte {byte}"));
        }
        f.write_str(&parts.join(", "))
    }
}

/// What went wrong. Each variant's message ends with advice.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ErrorKind {
    /// The file has no bytes at all.
    EmptyFile,
    /// The file has a header but no data rows.
    NoDataRows { columns: usize },
    /// A row has a different number of fields from the header.
    RaggedRow {
        at: Where,
        found: usize,
        expected: usize,
    },
    /// A quoted field is never closed.
    UnclosedQuote { at: Where },
    /// The bytes are not text in any encoding we read (for example an image renamed .csv).
    NotText { at: Where, reason: String },
    /// A spreadsheet (xlsx / ods) could not be opened or read.
    Spreadsheet { reason: String },
    /// A sheet asked for by name does not exist.
    NoSuchSheet {
        name: String,
        available: Vec<String>,
    },
    /// The file is bigger than this reader accepts.
    TooBig { bytes: u64, limit: u64 },
    /// A setting given by the user makes no sense (empty missing-value token, say).
    BadSetting { setting: String, reason: String },
    /// The work was cancelled through the progress observer.
    Cancelled,
    /// Outcomes, predictions or weights handed to a metric or a baseline model that it
    /// cannot use (empty, one class only, NaN, probabilities outside [0, 1], lengths that
    /// differ, ...). `reason` says what is wrong and what to do.
    BadScores { what: String, reason: String },
    /// A column named in a setting does not exist.
    NoSuchColumn {
        name: String,
        available: Vec<String>,
    },
    /// The chosen columns cannot make a model (one-class outcome, no predictors, ...).
    BadDesign { reason: String },
    /// A model file that cannot be used: not JSON, not a Spinney model, or inconsistent
    /// contents. `at` holds the line and column when the JSON itself is at fault.
    BadModelFile { at: Where, reason: String },
    /// A model file whose major format version is newer than this Spinney reads.
    NewerModelFile {
        major: u64,
        minor: u64,
        written_by: String,
        reads: u64,
    },
    /// A study file that cannot be used: not JSON, not a study, cut short, or inconsistent
    /// contents. `at` holds the line and column when the JSON itself is at fault.
    BadStudyFile { at: Where, reason: String },
    /// A study file whose major format version is newer than this Spinney reads.
    NewerStudyFile {
        major: u64,
        minor: u64,
        written_by: String,
        reads: u64,
    },
    /// A model could not be written as a file (a value JSON cannot hold).
    ModelNotSaved { reason: String },
    /// A table to score lacks predictors the model needs, or holds them as another kind.
    ColumnsForModel {
        missing: Vec<String>,
        wrong_kind: Vec<String>,
        available: Vec<String>,
    },
}

/// The error type of spinney-core.
#[derive(Debug, Clone, PartialEq)]
pub struct Error(Box<ErrorKind>);

impl Error {
    pub fn new(kind: ErrorKind) -> Self {
        Error(Box::new(kind))
    }
    pub fn kind(&self) -> &ErrorKind {
        &self.0
    }
    /// Where in the input the error happened, if it is tied to a place.
    pub fn location(&self) -> Option<&Where> {
        match &*self.0 {
            ErrorKind::RaggedRow { at, .. }
            | ErrorKind::UnclosedQuote { at }
            | ErrorKind::NotText { at, .. }
            | ErrorKind::BadModelFile { at, .. }
            | ErrorKind::BadStudyFile { at, .. } => Some(at),
            _ => None,
        }
    }
}

impl From<ErrorKind> for Error {
    fn from(kind: ErrorKind) -> Self {
        Error::new(kind)
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &*self.0 {
            ErrorKind::EmptyFile => write!(
                f,
                "the file is empty (0 bytes). Choose the file again; if it came from an export, \
                 check that the export finished"
            ),
            ErrorKind::NoDataRows { columns } => write!(
                f,
                "the file has a header row ({columns} column(s)) but no data rows below it. \
                 Check that you exported the records and not only the column names"
            ),
            ErrorKind::RaggedRow {
                at,
                found,
                expected,
            } => write!(
                f,
                "{at}: this row has {found} field(s) but the header has {expected}. Look for a \
                 missing or extra delimiter on that line, or a value containing the delimiter \
                 that should be in double quotes"
            ),
            ErrorKind::UnclosedQuote { at } => write!(
                f,
                "{at}: a double quote opens a value here and is never closed, so the rest of \
                 the file would be swallowed into one value. Close the quote, or double any \
                 quote that is part of the text (\"\")"
            ),
            ErrorKind::NotText { at, reason } => write!(
                f,
                "{at}: this does not look like a text table ({reason}). Is it really a \
                 CSV/TSV file? Spreadsheets must keep their .xlsx or .ods name"
            ),
            ErrorKind::Spreadsheet { reason } => write!(
                f,
                "the spreadsheet could not be read: {reason}. If it was copied or downloaded, \
                 the copy may be incomplete; open it in a spreadsheet program and save it again"
            ),
            ErrorKind::NoSuchSheet { name, available } => write!(
                f,
                "there is no sheet named '{name}'; the workbook has: {}. Pick one of those",
                available.join(", ")
            ),
            ErrorKind::TooBig { bytes, limit } => write!(
                f,
                "the file is {} MB, more than the {} MB this reader accepts. Use the spinney \
                 command-line program for files this size",
                bytes / 1_000_000,
                limit / 1_000_000
            ),
            ErrorKind::BadSetting { setting, reason } => {
                write!(f, "the setting '{setting}' is not usable: {reason}")
            }
            ErrorKind::Cancelled => write!(f, "cancelled; nothing was changed"),
            ErrorKind::BadScores { what, reason } => {
                write!(f, "{what} cannot be computed: {reason}")
            }
            ErrorKind::NoSuchColumn { name, available } => {
                let shown: Vec<&str> = available.iter().take(12).map(String::as_str).collect();
                write!(
                    f,
                    "there is no column named '{name}'; the table has: {}{}. Check the spelling \
                     (names are matched exactly)",
                    shown.join(", "),
                    if available.len() > 12 { ", ..." } else { "" }
                )
            }
            ErrorKind::BadDesign { reason } => write!(f, "{reason}"),
            ErrorKind::BadModelFile { at, reason } => write!(
                f,
                "this model file cannot be used: {reason}{}. Save the model again with \
                 `spinney fit ... --save-model`; if the file was copied or edited, take the \
                 original again",
                place(at)
            ),
            ErrorKind::NewerModelFile {
                major,
                minor,
                written_by,
                reads,
            } => newer(f, "model", (*major, *minor), written_by, *reads, "read"),
            ErrorKind::BadStudyFile { at, reason } => write!(
                f,
                "this study file cannot be used: {reason}{}. Save the study again from the \
                 page; if the file was copied or edited, take the original again",
                place(at)
            ),
            ErrorKind::NewerStudyFile {
                major,
                minor,
                written_by,
                reads,
            } => newer(f, "study", (*major, *minor), written_by, *reads, "open"),
            ErrorKind::ModelNotSaved { reason } => write!(
                f,
                "the model cannot be saved: {reason}. This is a fault in Spinney; please report \
                 it with the command and settings used"
            ),
            ErrorKind::ColumnsForModel {
                missing,
                wrong_kind,
                available,
            } => {
                let mut parts = Vec::new();
                if !missing.is_empty() {
                    let shown: Vec<&str> = available.iter().take(12).map(String::as_str).collect();
                    parts.push(format!(
                        "the model needs the column(s) {}, which the table lacks (it has: {}{}). \
                         Add them, or rename columns to the names used in training (matched \
                         exactly)",
                        quoted(missing),
                        shown.join(", "),
                        if available.len() > 12 { ", ..." } else { "" }
                    ));
                }
                if !wrong_kind.is_empty() {
                    parts.push(format!(
                        "{}. Set each column's kind to the one used in training",
                        wrong_kind.join("; ")
                    ));
                }
                write!(f, "{}", parts.join("; "))
            }
        }
    }
}

/// A file of a newer major format version than this Spinney reads.
fn newer(
    f: &mut fmt::Formatter<'_>,
    kind: &str,
    (major, minor): (u64, u64),
    written_by: &str,
    reads: u64,
    verb: &str,
) -> fmt::Result {
    write!(
        f,
        "this {kind} file has format version {major}.{minor}, written by {written_by}; this \
         Spinney ({}) reads format version {reads} and older. Update Spinney to {verb} it",
        crate::VERSION
    )
}

/// " (line L, column C)" where a JSON reader knows them.
fn place(at: &Where) -> String {
    match (at.line, &at.column) {
        (Some(line), Some(column)) => format!(" (line {line}, column {column})"),
        (Some(line), None) => format!(" (line {line})"),
        _ => String::new(),
    }
}

fn quoted(names: &[String]) -> String {
    names
        .iter()
        .map(|n| format!("'{n}'"))
        .collect::<Vec<_>>()
        .join(", ")
}

impl std::error::Error for Error {}

pub type Result<T> = std::result::Result<T, Error>;

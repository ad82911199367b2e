//! The description of a loaded file that both the command line (`spinney inspect --json`) and
//! the page show: how it was read, its fingerprint, and a summary per column. A plain,
//! versioned, serialisable struct built by hand from the data types (invariant 5).

use super::read::{Loaded, Source};
use super::summary::{summarise, ColumnSummary};

/// Bumped on any change that breaks readers of the JSON form.
pub const REPORT_VERSION: u32 = 1;

#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct SourceReport {
    /// "delimited" or "spreadsheet".
    pub kind: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub delimiter: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub encoding: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub decimal: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub format: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sheet: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub sheets: Option<Vec<String>>,
    /// One line for people.
    pub description: String,
}

#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct TableReport {
    pub format: String,
    pub version: u32,
    pub file: String,
    pub bytes: u64,
    pub fingerprint_sha256: String,
    pub source: SourceReport,
    pub rows: usize,
    pub columns: Vec<ColumnSummary>,
    pub notices: Vec<String>,
}

/// Builds the report of `loaded`, read from a file called `file`.
pub fn report(loaded: &Loaded, file: &str) -> TableReport {
    let source = match &loaded.source {
        Source::Delimited {
            delimiter,
            encoding,
            decimal,
        } => SourceReport {
            kind: "delimited".into(),
            delimiter: Some((*delimiter as char).to_string()),
            encoding: Some(encoding.label().into()),
            decimal: Some((*decimal as char).to_string()),
            format: None,
            sheet: None,
            sheets: None,
            description: loaded.source.describe(),
        },
        Source::Spreadsheet {
            format,
            sheet,
            sheets,
        } => SourceReport {
            kind: "spreadsheet".into(),
            delimiter: None,
            encoding: None,
            decimal: None,
            format: Some(format.to_string()),
            sheet: Some(sheet.clone()),
            sheets: Some(sheets.clone()),
            description: loaded.source.describe(),
        },
    };
    TableReport {
        format: "spinney-inspect".into(),
        version: REPORT_VERSION,
        file: file.to_string(),
        bytes: loaded.bytes,
        fingerprint_sha256: loaded.fingerprint.clone(),
        source,
        rows: loaded.table.rows,
        columns: summarise(&loaded.table),
        notices: loaded.notices.clone(),
    }
}

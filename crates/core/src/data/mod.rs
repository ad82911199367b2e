//! The data layer: a [`Table`] of typed columns read from delimited text or a spreadsheet.
//!
//! ```text
//! bytes ─► decode (encoding) ─► delimited::Splitter ─┐
//!      └─► spreadsheet (calamine) ───────────────────┴─► columns::Builder per column ─► Table
//! ```
//!
//! [`read_table`] is the one entry point. Column kinds are inferred and can be overridden
//! through [`ReadOptions::kinds`]; the caller keeps the file bytes and reads again to apply an
//! override (a second read of a 50 MB file takes a fraction of a second).

pub mod columns;
pub mod decode;
pub mod delimited;
pub mod read;
pub mod report;
pub mod spreadsheet;
pub mod summary;
pub mod values;

pub use read::{read_table, Loaded, ReadOptions, Source};
pub use report::{report, TableReport};
pub use summary::{format_statistic, summarise, ColumnSummary, Flag, TopValue};

/// What a column holds, as shown to the user.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
pub enum Kind {
    /// Any real number.
    #[serde(rename = "number")]
    Number,
    /// Integers only (counts, grades, years).
    #[serde(rename = "whole number")]
    WholeNumber,
    /// Two values such as yes/no, true/false or 0/1; stored as 0 and 1.
    #[serde(rename = "yes/no")]
    YesNo,
    /// A small set of labels.
    #[serde(rename = "category")]
    Category,
    /// A calendar date, stored as days since 1970-01-01.
    #[serde(rename = "date")]
    Date,
    /// A date with a time of day, stored as (fractional) days since 1970-01-01.
    #[serde(rename = "date-time")]
    DateTime,
    /// Free text or record identifiers: many distinct labels, not used as a predictor as is.
    #[serde(rename = "text")]
    Text,
}

impl Kind {
    pub const ALL: [Kind; 7] = [
        Kind::Number,
        Kind::WholeNumber,
        Kind::YesNo,
        Kind::Category,
        Kind::Date,
        Kind::DateTime,
        Kind::Text,
    ];

    /// The plain name shown to users (and used in JSON).
    pub fn label(self) -> &'static str {
        match self {
            Kind::Number => "number",
            Kind::WholeNumber => "whole number",
            Kind::YesNo => "yes/no",
            Kind::Category => "category",
            Kind::Date => "date",
            Kind::DateTime => "date-time",
            Kind::Text => "text",
        }
    }

    pub fn from_label(label: &str) -> Option<Kind> {
        Kind::ALL
            .into_iter()
            .find(|k| k.label().eq_ignore_ascii_case(label.trim()))
    }

    /// Whether values are stored as numbers (`Values::Numbers`).
    pub fn is_numeric(self) -> bool {
        !matches!(self, Kind::Category | Kind::Text)
    }
}

/// Marks a missing entry among category codes.
pub const MISSING_CODE: u32 = u32::MAX;

/// A column's values.
#[derive(Debug, Clone, PartialEq)]
pub enum Values {
    /// Numbers, dates (days), yes/no (0 / 1); missing is NaN.
    Numbers(Vec<f64>),
    /// Category or text codes into `levels`; missing is [`MISSING_CODE`].
    Levels {
        codes: Vec<u32>,
        levels: Vec<String>,
    },
}

impl Values {
    pub fn len(&self) -> usize {
        match self {
            Values::Numbers(v) => v.len(),
            Values::Levels { codes, .. } => codes.len(),
        }
    }
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    pub fn is_missing(&self, row: usize) -> bool {
        match self {
            Values::Numbers(v) => v[row].is_nan(),
            Values::Levels { codes, .. } => codes[row] == MISSING_CODE,
        }
    }
}

/// One typed column.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    pub name: String,
    pub kind: Kind,
    pub values: Values,
    /// For yes/no columns, the words the file used for 0 and 1 (e.g. `["no", "yes"]`).
    pub yes_no_labels: Option<[String; 2]>,
    /// The unit of stored numbers when it is not the file's own (dates: days since 1970-01-01).
    pub unit: Option<&'static str>,
}

impl Column {
    /// The value of `row` as text, the way the user would recognise it; `None` when missing.
    pub fn display(&self, row: usize) -> Option<String> {
        match &self.values {
            Values::Numbers(v) => {
                let x = v[row];
                if x.is_nan() {
                    return None;
                }
                Some(match self.kind {
                    Kind::YesNo => match &self.yes_no_labels {
                        Some(labels) => labels[(x != 0.0) as usize].clone(),
                        None => format_number(x),
                    },
                    Kind::Date => format_date(x, false),
                    Kind::DateTime => format_date(x, true),
                    _ => format_number(x),
                })
            }
            Values::Levels { codes, levels } => {
                let c = codes[row];
                (c != MISSING_CODE).then(|| levels[c as usize].clone())
            }
        }
    }
}

/// The unit stated for date and date-time columns.
pub const DATE_UNIT: &str = "days since 1970-01-01";

/// A table of equally long typed columns.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Table {
    pub columns: Vec<Column>,
    pub rows: usize,
}

impl Table {
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }
}

/// Shortest text that reads back to the same number ("3.5", "12", "1e-7").
pub fn format_number(x: f64) -> String {
    if x == x.trunc() && x.abs() < 1e15 {
        format!("{}", x as i64)
    } else {
        format!("{x}")
    }
}

/// Formats days since 1970-01-01 as `yyyy-mm-dd` (and `hh:mm[:ss]` with `time`).
pub fn format_date(days: f64, time: bool) -> String {
    let whole = days.floor();
    let (y, m, d) = civil_from_days(whole as i64);
    if !time {
        return format!("{y:04}-{m:02}-{d:02}");
    }
    let secs = ((days - whole) * 86400.0).round() as i64;
    let (h, mi, s) = (secs / 3600, (secs / 60) % 60, secs % 60);
    if s == 0 {
        format!("{y:04}-{m:02}-{d:02} {h:02}:{mi:02}")
    } else {
        format!("{y:04}-{m:02}-{d:02} {h:02}:{mi:02}:{s:02}")
    }
}

/// Inverse of [`values::days_from_civil`] (Howard Hinnant's `civil_from_days`).
pub fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719468;
    let era = z.div_euclid(146097);
    let doe = z - era * 146097;
    let yoe = (doe - doe / 1460 + doe / 36524 - doe / 146096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    (if m <= 2 { y + 1 } else { y }, m, d)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dates_round_trip() {
        for days in [-719468i64, -1, 0, 11016, 19782, 20082, 2932896] {
            let (y, m, d) = civil_from_days(days);
            assert_eq!(values::days_from_civil(y, m, d), days);
        }
        assert_eq!(format_date(19787.0 + 14.5 / 24.0, true), "2024-03-05 14:30");
        assert_eq!(format_number(3.5), "3.5");
        assert_eq!(format_number(-12.0), "-12");
    }
}

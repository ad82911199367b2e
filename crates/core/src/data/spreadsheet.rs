//! Workbooks (.xlsx, .xlsm, .xlsb, .xls, .ods) through calamine. The first sheet is read
//! unless another is named; the first row holds the column names. Typed cells (numbers,
//! dates, booleans) go to the column builders as they are, text cells as text.

use std::io::Cursor;

use calamine::{open_workbook_auto_from_rs, Data, Reader, Sheets};

use super::columns::{self, Builder, Cell};
use super::read::{clean_names, finish, plans, ReadOptions, Source};
use super::values::{days_from_civil, MissingTokens, NumberStyle};
use super::Table;
use crate::error::{Error, ErrorKind, Result};
use crate::progress::{Flow, Progress};

/// Zip archives (xlsx, ods) and OLE compound files (xls) by their first bytes.
pub fn looks_like_workbook(bytes: &[u8]) -> bool {
    bytes.starts_with(b"PK\x03\x04") || bytes.starts_with(b"\xD0\xCF\x11\xE0\xA1\xB1\x1A\xE1")
}

fn spreadsheet_error(reason: impl std::fmt::Display) -> Error {
    Error::new(ErrorKind::Spreadsheet {
        reason: reason.to_string(),
    })
}

/// The sheet names of a workbook, in order.
pub fn sheet_names(bytes: &[u8]) -> Result<Vec<String>> {
    let book = open_workbook_auto_from_rs(Cursor::new(bytes)).map_err(spreadsheet_error)?;
    Ok(book.sheet_names())
}

pub(crate) fn read(
    bytes: &[u8],
    options: &ReadOptions,
    missing: &MissingTokens,
    progress: &mut dyn Progress,
) -> Result<(Table, Source, Vec<String>)> {
    let mut notices = Vec::new();
    let mut book = open_workbook_auto_from_rs(Cursor::new(bytes)).map_err(|e| {
        spreadsheet_error(format!(
            "it is not a complete xlsx, xls or ods workbook ({e})"
        ))
    })?;
    let format = match &book {
        Sheets::Xls(_) => "xls",
        Sheets::Xlsx(_) => "xlsx",
        Sheets::Xlsb(_) => "xlsb",
        Sheets::Ods(_) => "ods",
    };
    let sheets = book.sheet_names();
    let sheet = match &options.sheet {
        Some(name) if sheets.contains(name) => name.clone(),
        Some(name) => {
            return Err(ErrorKind::NoSuchSheet {
                name: name.clone(),
                available: sheets,
            }
            .into())
        }
        None => sheets
            .first()
            .cloned()
            .ok_or_else(|| spreadsheet_error("the workbook has no sheets"))?,
    };
    if options.sheet.is_none() && sheets.len() > 1 {
        notices.push(format!(
            "the workbook has {} sheets; read the first, '{sheet}' (choose another by name)",
            sheets.len()
        ));
    }
    let range = book
        .worksheet_range(&sheet)
        .map_err(|e| spreadsheet_error(format!("sheet '{sheet}' could not be read ({e})")))?;
    let mut rows = range.rows();
    let header = rows.next().ok_or(ErrorKind::EmptyFile)?;
    let names = clean_names(header.iter().map(header_text).collect(), &mut notices);
    let ncols = names.len();
    let plans = plans(&names, options, &mut notices);
    let height = range.height().saturating_sub(1);
    let mut builders: Vec<Builder> = plans
        .iter()
        .map(|&p| Builder::new(p, NumberStyle::POINT, height))
        .collect();
    let mut n = 0usize;
    let mut skipped_blank = 0usize;
    for row in rows {
        if row.iter().all(|c| matches!(c, Data::Empty)) {
            skipped_blank += 1;
            continue;
        }
        for (b, builder) in builders.iter_mut().enumerate() {
            let owned;
            let cell = match row.get(b) {
                Some(data) => {
                    owned = data.clone();
                    to_cell(&owned)
                }
                None => Cell::Empty,
            };
            builder.push(cell, missing);
        }
        n += 1;
        if n.is_multiple_of(4096)
            && progress.step("reading sheet", n as u64, height as u64) == Flow::Stop
        {
            return Err(ErrorKind::Cancelled.into());
        }
    }
    if n == 0 {
        return Err(ErrorKind::NoDataRows { columns: ncols }.into());
    }
    if skipped_blank > 0 {
        notices.push(format!(
            "{skipped_blank} empty row(s) in the sheet were skipped"
        ));
    }
    let (again, mut second) = columns::second_pass(&builders, NumberStyle::POINT, n);
    if !again.is_empty() {
        for row in range.rows().skip(1) {
            if row.iter().all(|c| matches!(c, Data::Empty)) {
                continue;
            }
            for (builder, &col) in second.iter_mut().zip(&again) {
                builder.push(row.get(col).map_or(Cell::Empty, to_cell), missing);
            }
        }
        columns::replace(&mut builders, again, second);
    }
    progress.step("reading sheet", height as u64, height as u64);
    let table = finish(builders, names, n, &mut notices);
    Ok((
        table,
        Source::Spreadsheet {
            format,
            sheet,
            sheets,
        },
        notices,
    ))
}

fn header_text(cell: &Data) -> String {
    match cell {
        Data::Empty => String::new(),
        Data::Float(x) => super::format_number(*x),
        other => other.to_string(),
    }
}

fn to_cell(data: &Data) -> Cell<'_> {
    match data {
        Data::Int(i) => Cell::Number(*i as f64),
        Data::Float(x) => Cell::Number(*x),
        Data::String(s) | Data::DateTimeIso(s) | Data::DurationIso(s) => Cell::Text(s),
        Data::Bool(b) => Cell::Bool(*b),
        Data::DateTime(dt) if dt.is_datetime() => {
            let (y, mo, d, h, mi, s, ms) = dt.to_ymd_hms_milli();
            let day = days_from_civil(y as i64, mo as u32, d as u32) as f64;
            let secs = h as f64 * 3600.0 + mi as f64 * 60.0 + s as f64 + ms as f64 / 1000.0;
            Cell::Date {
                days: day + secs / 86400.0,
                has_time: secs > 0.0,
            }
        }
        Data::DateTime(dt) => Cell::Number(dt.as_f64()),
        Data::Error(_) | Data::Empty => Cell::Empty,
    }
}

//! The workbook reader: a zip-bomb guard on the container's central directory, then one
//! worksheet read with calamine into cell texts.
//!
//! The guard runs before any entry is decompressed. It counts entries from the end-of-central-
//! directory record (so a directory with millions of entries is refused before it is
//! parsed), then reads the central directory and refuses the workbook when the declared
//! uncompressed sizes add up to too much or one large entry is compressed suspiciously well.

use std::io::Cursor;
use std::panic::{AssertUnwindSafe, catch_unwind};

use calamine::{Data, Reader, Xlsx};

use crate::error::{Result, StoreError};
use crate::import::{FormulaCell, ImportOptions, ZipLimits};
use crate::source::CellGrid;

/// One worksheet read into cell texts, with its formulas.
pub(crate) struct Book {
    pub grid: CellGrid,
    pub sheet: String,
    pub sheets: Vec<String>,
    pub formulas: Vec<FormulaCell>,
    pub notes: Vec<String>,
}

fn u16_at(b: &[u8], at: usize) -> Option<u64> {
    Some(u64::from(u16::from_le_bytes(b.get(at..at + 2)?.try_into().ok()?)))
}
fn u64_at(b: &[u8], at: usize) -> Option<u64> {
    Some(u64::from_le_bytes(b.get(at..at + 8)?.try_into().ok()?))
}

/// The number of entries the end-of-central-directory record declares (zip64 aware).
fn declared_entries(b: &[u8]) -> Option<u64> {
    const EOCD: [u8; 4] = [0x50, 0x4b, 0x05, 0x06];
    const LOCATOR: [u8; 4] = [0x50, 0x4b, 0x06, 0x07];
    const ZIP64_EOCD: [u8; 4] = [0x50, 0x4b, 0x06, 0x06];
    // The record is 22 bytes plus a comment of at most 65,535 bytes, at the very end.
    let lowest = b.len().saturating_sub(22 + 65_535);
    let at = (lowest..=b.len().saturating_sub(22)).rev().find(|&i| b.get(i..i + 4) == Some(&EOCD[..]))?;
    let entries = u16_at(b, at + 10)?;
    if entries != 0xFFFF {
        return Some(entries);
    }
    let loc = at.checked_sub(20)?;
    if b.get(loc..loc + 4) != Some(&LOCATOR[..]) {
        return Some(entries);
    }
    let z = usize::try_from(u64_at(b, loc + 8)?).ok()?;
    if b.get(z..z + 4) != Some(&ZIP64_EOCD[..]) {
        return Some(entries);
    }
    u64_at(b, z + 32)
}

/// Checks a zip container against the limits without decompressing anything.
pub fn check_zip(bytes: &[u8], limits: &ZipLimits) -> Result<()> {
    let bad = |reason: String| StoreError::Workbook { reason };
    let declared =
        declared_entries(bytes).ok_or_else(|| bad("the zip container has no central directory".into()))?;
    if declared > limits.max_entries as u64 {
        return Err(StoreError::ZipTooManyEntries {
            entries: usize::try_from(declared).unwrap_or(usize::MAX),
            limit: limits.max_entries,
        });
    }
    let archive = zip::ZipArchive::new(Cursor::new(bytes))
        .map_err(|e| bad(format!("the zip container is damaged ({e})")))?;
    if archive.len() > limits.max_entries {
        return Err(StoreError::ZipTooManyEntries { entries: archive.len(), limit: limits.max_entries });
    }
    if archive.has_duplicate_names() {
        return Err(bad("the zip container holds two packed files with the same name".into()));
    }
    let mut total: u64 = 0;
    let mut worst: Option<(String, u64)> = None;
    for i in 0..archive.len() {
        let entry =
            archive.by_index_data(i).map_err(|e| bad(format!("the zip container is damaged ({e})")))?;
        let size = entry.size();
        total = total.saturating_add(size);
        if size > limits.ratio_floor_bytes {
            let ratio = size / entry.compressed_size().max(1);
            if ratio > limits.max_ratio && worst.as_ref().is_none_or(|(_, r)| ratio > *r) {
                let name =
                    entry.name().map(|n| n.into_owned()).unwrap_or_else(|_| format!("entry {}", i + 1));
                worst = Some((name, ratio));
            }
        }
    }
    if total > limits.max_unpacked_bytes {
        return Err(StoreError::ZipTooLarge { bytes: total, limit: limits.max_unpacked_bytes });
    }
    if let Some((entry, ratio)) = worst {
        return Err(StoreError::ZipRatio { entry, ratio, limit: limits.max_ratio });
    }
    Ok(())
}

/// The text of one cell, and whether it was a date.
fn cell_text(cell: &Data) -> (String, bool) {
    match cell {
        Data::Empty => (String::new(), false),
        Data::Int(i) => (i.to_string(), false),
        Data::Float(f) => (float_text(*f), false),
        Data::String(s) | Data::DateTimeIso(s) | Data::DurationIso(s) => (s.clone(), false),
        Data::Bool(b) => ((if *b { "TRUE" } else { "FALSE" }).to_owned(), false),
        Data::Error(e) => (e.to_string(), false),
        Data::DateTime(dt) => {
            if dt.is_duration() {
                return (float_text(dt.as_f64()), false);
            }
            let (y, mo, d, h, mi, s, _) = dt.to_ymd_hms_milli();
            let text = if h == 0 && mi == 0 && s == 0 {
                format!("{y:04}-{mo:02}-{d:02}")
            } else {
                format!("{y:04}-{mo:02}-{d:02} {h:02}:{mi:02}:{s:02}")
            };
            (text, true)
        }
    }
}

/// Shortest text that reads back as the same number, in a form the importer reads.
fn float_text(f: f64) -> String {
    if !f.is_finite() {
        return f.to_string();
    }
    if f.fract() == 0.0 && f.abs() < 1e15 {
        return format!("{}", f as i64);
    }
    if f != 0.0 && (f.abs() >= 1e15 || f.abs() < 1e-6) { format!("{f:e}") } else { format!("{f}") }
}

/// Reads the chosen (or first) worksheet after the zip guard.
pub(crate) fn read_sheet(bytes: &[u8], options: &ImportOptions) -> Result<Book> {
    check_zip(bytes, &options.limits.zip)?;
    // The reader is a third-party parser of untrusted input: a panic inside it becomes a
    // plain refusal instead of taking the process down.
    let read = catch_unwind(AssertUnwindSafe(|| read_sheet_inner(bytes, options)));
    read.unwrap_or_else(|_| {
        Err(StoreError::Workbook { reason: "the workbook's contents are malformed".into() })
    })
}

fn read_sheet_inner(bytes: &[u8], options: &ImportOptions) -> Result<Book> {
    let mut book: Xlsx<_> = calamine::open_workbook_from_rs(Cursor::new(bytes))
        .map_err(|e: calamine::XlsxError| StoreError::Workbook { reason: e.to_string() })?;
    let sheets = book.sheet_names();
    let sheet = match &options.sheet {
        Some(s) => {
            if !sheets.iter().any(|n| n == s) {
                return Err(StoreError::NoSuchSheet { sheet: s.clone(), available: sheets.join(", ") });
            }
            s.clone()
        }
        None => sheets
            .first()
            .cloned()
            .ok_or_else(|| StoreError::Workbook { reason: "it has no worksheets".into() })?,
    };
    let range = book.worksheet_range(&sheet).map_err(|e| StoreError::Workbook { reason: e.to_string() })?;
    let Some((r0, c0)) = range.start() else {
        return Err(StoreError::EmptySheet { sheet });
    };
    let (height, width) = range.get_size();
    if width > options.limits.max_columns {
        return Err(StoreError::TooManyColumns { found: width, limit: options.limits.max_columns });
    }
    let max_cell = options.limits.max_cell_bytes;
    let header_row = r0 as usize + 1;
    let mut rows_iter = range.rows();
    let header_cells = rows_iter.next().ok_or_else(|| StoreError::EmptySheet { sheet: sheet.clone() })?;
    let mut header = Vec::with_capacity(width);
    for (i, cell) in header_cells.iter().enumerate() {
        let (text, _) = cell_text(cell);
        if text.len() > max_cell {
            return Err(StoreError::CellTooLong {
                row: header_row,
                column: format!("column {}", i + 1),
                bytes: text.len(),
                limit: max_cell,
            });
        }
        header.push(crate::infer::trim_blank(&text).to_owned());
    }
    let mut rows = Vec::with_capacity(height.saturating_sub(1));
    let mut date_cols = vec![false; width];
    for row in rows_iter {
        let mut cells = Vec::with_capacity(width);
        for (c, cell) in row.iter().enumerate() {
            let (text, is_date) = cell_text(cell);
            if is_date {
                date_cols[c] = true;
            }
            cells.push(text);
        }
        rows.push(cells);
    }
    if rows.iter().all(|r| r.iter().all(|c| c.trim().is_empty())) {
        if header.iter().all(String::is_empty) {
            return Err(StoreError::EmptySheet { sheet });
        }
        return Err(StoreError::HeaderOnly);
    }
    let mut notes = Vec::new();
    for (c, is_date) in date_cols.iter().enumerate() {
        if *is_date {
            notes.push(format!("column {:?} holds dates; they are kept as text (year-month-day)", header[c]));
        }
    }
    // Formulas: their positions in sheet coordinates, mapped onto the grid.
    let mut formulas = Vec::new();
    if let Ok(franges) = book.worksheet_formula(&sheet)
        && let Some((fr0, fc0)) = franges.start()
    {
        for (r, c, f) in franges.used_cells() {
            if f.is_empty() {
                continue;
            }
            let abs_row = fr0 as usize + r;
            let abs_col = fc0 as usize + c;
            if abs_row <= r0 as usize || abs_col < c0 as usize || abs_col >= c0 as usize + width {
                continue;
            }
            formulas.push(FormulaCell {
                column: abs_col - c0 as usize,
                row: abs_row + 1,
                formula: format!("={f}"),
            });
        }
    }
    formulas.sort_by_key(|f| (f.column, f.row));
    Ok(Book { grid: CellGrid { header, header_row, rows }, sheet, sheets, formulas, notes })
}

//! Every table of the brief as CSV and as an XLSX workbook.
//!
//! **CSV layout.** One file, `tables.csv`, holds every table in the order of the brief. Each
//! table starts with a header line whose first field is the word `table` followed by the
//! table's column names; each of its rows starts with the table's name (e.g. `coefficients`)
//! followed by the cells; a blank line separates tables. Filtering the first column on one
//! name gives that table. Numbers are written unquoted at full precision.
//!
//! **XLSX layout.** One worksheet per table, named after it, with a bold header row;
//! numbers are numeric cells.
//!
//! **Injection.** Text cells that start with `=`, `+`, `-`, `@`, a tab or a carriage return
//! get a leading single quote, so no spreadsheet reads them as a formula (OWASP
//! "CSV Injection" guidance). Numbers are never altered.

use rust_xlsxwriter::{Format, Workbook};

use super::{Brief, Cell, Table};
use crate::{ReportError, Result};

/// Neutralises a text cell that a spreadsheet could read as a formula.
pub fn neutralise(text: &str) -> String {
    match text.chars().next() {
        Some('=' | '+' | '-' | '@' | '\t' | '\r') => format!("'{text}"),
        _ => text.to_owned(),
    }
}

fn csv_field(text: &str) -> String {
    let safe = neutralise(text);
    if safe.contains([',', '"', '\n', '\r']) { format!("\"{}\"", safe.replace('"', "\"\"")) } else { safe }
}

fn csv_cell(cell: &Cell) -> String {
    match cell {
        Cell::Number { value, .. } => format!("{value}"),
        Cell::Text(t) => csv_field(t),
        Cell::Empty => String::new(),
    }
}

/// Writes every table of the brief as one CSV text (layout in the module documentation).
///
/// # Errors
/// [`ReportError::Brief`] when the brief lacks its limitations section.
pub fn to_csv(brief: &Brief) -> Result<String> {
    brief.verify()?;
    let mut out = String::new();
    for (i, t) in brief.tables().into_iter().enumerate() {
        if i > 0 {
            out.push_str("\r\n");
        }
        let mut header = vec!["table".to_owned()];
        header.extend(t.columns.iter().map(|c| csv_field(c)));
        out.push_str(&header.join(","));
        out.push_str("\r\n");
        for row in &t.rows {
            let mut fields = vec![csv_field(&t.name)];
            fields.extend(row.iter().map(csv_cell));
            out.push_str(&fields.join(","));
            out.push_str("\r\n");
        }
    }
    Ok(out)
}

fn sheet_name(t: &Table, used: &mut Vec<String>) -> String {
    // Worksheet names are at most 31 characters and may not hold []:*?/\ characters.
    let base: String =
        t.name.chars().map(|c| if "[]:*?/\\".contains(c) { '_' } else { c }).take(28).collect();
    let mut name = base.clone();
    let mut k = 2;
    while used.iter().any(|u| u.eq_ignore_ascii_case(&name)) {
        name = format!("{base}_{k}");
        k += 1;
    }
    used.push(name.clone());
    name
}

fn xlsx_err(e: rust_xlsxwriter::XlsxError) -> ReportError {
    ReportError::brief(format!("the workbook cannot be written: {e}"))
}

/// Writes every table of the brief as an XLSX workbook, one worksheet per table.
///
/// # Errors
/// [`ReportError::Brief`] when the brief lacks its limitations section or the workbook
/// cannot be written.
pub fn to_xlsx(brief: &Brief) -> Result<Vec<u8>> {
    brief.verify()?;
    let mut wb = Workbook::new();
    let bold = Format::new().set_bold();
    let mut used = Vec::new();
    for t in brief.tables() {
        let ws = wb.add_worksheet();
        ws.set_name(sheet_name(t, &mut used)).map_err(xlsx_err)?;
        for (j, c) in t.columns.iter().enumerate() {
            let col = u16::try_from(j).map_err(|_| ReportError::brief("a table has too many columns"))?;
            ws.write_string_with_format(0, col, neutralise(c), &bold).map_err(xlsx_err)?;
            ws.set_column_width(col, 16).map_err(xlsx_err)?;
        }
        for (i, row) in t.rows.iter().enumerate() {
            let r = u32::try_from(i + 1).map_err(|_| ReportError::brief("a table has too many rows"))?;
            for (j, cell) in row.iter().enumerate() {
                let col = u16::try_from(j).map_err(|_| ReportError::brief("a table has too many columns"))?;
                match cell {
                    Cell::Number { value, .. } => {
                        ws.write_number(r, col, *value).map_err(xlsx_err)?;
                    }
                    Cell::Text(s) => {
                        ws.write_string(r, col, neutralise(s)).map_err(xlsx_err)?;
                    }
                    Cell::Empty => {}
                }
            }
        }
    }
    wb.save_to_buffer().map_err(xlsx_err)
}

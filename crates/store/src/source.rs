//! Record sources: the common view of CSV records and worksheet rows that the importer reads.

use std::borrow::Cow;

use crate::error::Result;

/// A field's byte range in the text; `escaped` marks doubled quotes still to be collapsed.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Span {
    pub start: usize,
    pub end: usize,
    pub escaped: bool,
}

/// One record: the header, a data row or a blank line.
pub(crate) enum Row<'a> {
    /// A CSV record: field spans in the decoded text.
    Csv { text: &'a str, spans: &'a [Span], offset: usize, blank: bool },
    /// A worksheet row: cell texts.
    Cells { cells: &'a [String], blank: bool },
}

impl Row<'_> {
    /// Number of fields.
    pub fn len(&self) -> usize {
        match self {
            Row::Csv { spans, .. } => spans.len(),
            Row::Cells { cells, .. } => cells.len(),
        }
    }

    /// Whether the record holds nothing (a blank line or an empty worksheet row).
    pub fn is_blank(&self) -> bool {
        match self {
            Row::Csv { blank, .. } | Row::Cells { blank, .. } => *blank,
        }
    }

    /// The byte length of field `i` as written (before collapsing doubled quotes).
    pub fn raw_len(&self, i: usize) -> usize {
        match self {
            Row::Csv { spans, .. } => spans.get(i).map_or(0, |s| s.end - s.start),
            Row::Cells { cells, .. } => cells.get(i).map_or(0, String::len),
        }
    }

    /// The text of field `i` (empty when absent).
    pub fn cell(&self, i: usize) -> Cow<'_, str> {
        match self {
            Row::Csv { text, spans, .. } => match spans.get(i) {
                Some(s) => {
                    let raw = text.get(s.start..s.end).unwrap_or("");
                    if s.escaped { Cow::Owned(raw.replace("\"\"", "\"")) } else { Cow::Borrowed(raw) }
                }
                None => Cow::Borrowed(""),
            },
            Row::Cells { cells, .. } => Cow::Borrowed(cells.get(i).map_or("", String::as_str)),
        }
    }

    /// The byte offset where a CSV record starts (0 for worksheet rows).
    pub fn offset(&self) -> usize {
        match self {
            Row::Csv { offset, .. } => *offset,
            Row::Cells { .. } => 0,
        }
    }
}

/// A header plus data records, split into parts that can be read at the same time.
pub(crate) trait RecordSource: Sync {
    /// The header cells (trimmed).
    fn header(&self) -> &[String];
    /// The row number of the header (1 for CSV; the sheet row for worksheets).
    fn header_row(&self) -> usize;
    /// Number of parts.
    fn parts(&self) -> usize;
    /// Calls `f` on every record of a part, in order. Returns whether the part's last record
    /// ended exactly at the part's end (always true for worksheets).
    fn visit(&self, part: usize, f: &mut dyn FnMut(&Row<'_>) -> Result<()>) -> Result<bool>;
    /// The line number of a byte offset (CSV), for messages.
    fn line_of(&self, offset: usize) -> usize;
}

/// Worksheet rows held as cell texts.
pub(crate) struct CellGrid {
    pub header: Vec<String>,
    pub header_row: usize,
    pub rows: Vec<Vec<String>>,
}

impl RecordSource for CellGrid {
    fn header(&self) -> &[String] {
        &self.header
    }

    fn header_row(&self) -> usize {
        self.header_row
    }

    fn parts(&self) -> usize {
        1
    }

    fn visit(&self, _part: usize, f: &mut dyn FnMut(&Row<'_>) -> Result<()>) -> Result<bool> {
        for cells in &self.rows {
            let blank = cells.iter().all(|c| c.trim().is_empty());
            f(&Row::Cells { cells, blank })?;
        }
        Ok(true)
    }

    fn line_of(&self, _offset: usize) -> usize {
        0
    }
}

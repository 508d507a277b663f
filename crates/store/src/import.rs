//! The importer: reads a CSV or XLSX file, infers column types, the key and column roles,
//! builds the columns and writes the validation report. Nothing is stored here; the store
//! saves a [`StagedImport`] only when the analyst asks and no blocking problem is left.
//!
//! Nothing is coerced silently. A text cell in a numeric column is listed as a problem and
//! blocks saving until the analyst changes the column's type to text, drops the rows (with
//! a reason), or says explicitly that such cells are to be read as missing. Surrounding
//! spaces and tabs are trimmed from every cell; an empty cell is missing.

use std::collections::{BTreeMap, BTreeSet, HashMap, HashSet};
use std::path::Path;

use polars::prelude::{
    DataFrame, DataType, Float64Chunked, Int64Chunked, IntoColumn, IntoSeries, NewChunkedArray, PlSmallStr,
    Series, StringChunked, StringChunkedBuilder,
};
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::dataset::{
    ColumnMeta, ColumnRole, ColumnSummary, ColumnType, DroppedRow, ImportReport, ManifestColumn, Problem,
    ProblemCell, ProblemKind, SourceInfo,
};

use crate::csv::{CsvSource, DecimalChoice, Delimiter};
use crate::error::{Result, StoreError};
use crate::infer::{self, CellClass, ClassCounts, ValueFacts};
use crate::source::{RecordSource, Row};
use crate::text::{self, Encoding};

/// `1 row` / `2 rows`.
pub(crate) fn count(n: usize, one: &str, many: &str) -> String {
    if n == 1 { format!("1 {one}") } else { format!("{n} {many}") }
}

/// How many offending cells each problem lists.
pub const EXAMPLES: usize = 20;

/// The file format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Format {
    /// Decided from the first bytes: a zip container is a workbook, anything else CSV.
    #[default]
    Auto,
    /// Delimited text.
    Csv,
    /// An Excel workbook (`.xlsx`).
    Xlsx,
}

/// Limits on a workbook's zip container, checked from its central directory before any
/// entry is decompressed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ZipLimits {
    /// Most packed files allowed.
    pub max_entries: usize,
    /// Most bytes all entries may unpack to.
    pub max_unpacked_bytes: u64,
    /// Highest uncompressed/compressed ratio allowed for one entry…
    pub max_ratio: u64,
    /// …when that entry unpacks to more than this many bytes (tiny entries may compress
    /// very well without harm).
    pub ratio_floor_bytes: u64,
}

impl Default for ZipLimits {
    fn default() -> Self {
        Self {
            max_entries: 10_000,
            max_unpacked_bytes: 512 * 1024 * 1024,
            max_ratio: 200,
            ratio_floor_bytes: 1024 * 1024,
        }
    }
}

/// Size limits of an import. Exceeding one is a refusal, and nothing is stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limits {
    /// Largest file accepted, in bytes (`None`: no limit).
    pub max_bytes: Option<u64>,
    /// Most columns accepted.
    pub max_columns: usize,
    /// Longest cell accepted, in bytes.
    pub max_cell_bytes: usize,
    /// Workbook container limits.
    pub zip: ZipLimits,
}

impl Limits {
    /// The web app's upload limit: 256 MB.
    pub const WEB_UPLOAD_BYTES: u64 = 256 * 1024 * 1024;

    /// The limits of the web app (a 256 MB upload limit).
    pub fn web() -> Self {
        Self { max_bytes: Some(Self::WEB_UPLOAD_BYTES), ..Self::default() }
    }
}

impl Default for Limits {
    /// The command line's limits: no size limit, 500 columns, 32 KB per cell.
    fn default() -> Self {
        Self { max_bytes: None, max_columns: 500, max_cell_bytes: 32 * 1024, zip: ZipLimits::default() }
    }
}

/// A row the analyst drops, with the reason.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RowDrop {
    /// The row number (header = row 1).
    pub row: usize,
    /// Why; required.
    pub reason: String,
}

/// The analyst's choices for an import. The defaults sniff and infer everything.
#[derive(Debug, Clone, Default)]
pub struct ImportOptions {
    /// The file format.
    pub format: Format,
    /// The text encoding of a CSV file.
    pub encoding: Encoding,
    /// The delimiter of a CSV file (`None`: sniffed).
    pub delimiter: Option<Delimiter>,
    /// The decimal separator of a CSV file.
    pub decimal: DecimalChoice,
    /// The worksheet of a workbook (`None`: the first).
    pub sheet: Option<String>,
    /// The key column (`None`: detected).
    pub key: Option<String>,
    /// Type overrides by column name.
    pub types: BTreeMap<String, ColumnType>,
    /// Role overrides by column name.
    pub roles: BTreeMap<String, ColumnRole>,
    /// Rows to drop, each with a reason.
    pub drop_rows: Vec<RowDrop>,
    /// Numeric columns whose text cells the analyst accepts as missing values.
    pub text_as_missing: BTreeSet<String>,
    /// Size limits.
    pub limits: Limits,
    /// Worker threads for large CSV files (0: up to four, as the machine allows).
    pub threads: usize,
}

/// An imported table with its report, not yet stored.
#[derive(Debug, Clone)]
pub struct StagedImport {
    report: ImportReport,
    frame: DataFrame,
    columns: Vec<ManifestColumn>,
}

impl StagedImport {
    /// The validation report.
    pub fn report(&self) -> &ImportReport {
        &self.report
    }

    /// The columns as read (dropped rows left out; unreadable cells missing).
    pub fn frame(&self) -> &DataFrame {
        &self.frame
    }

    /// The key column.
    pub fn key(&self) -> Option<&str> {
        self.report.key.as_deref()
    }

    /// Column types and metadata, in table order.
    pub fn columns(&self) -> &[ManifestColumn] {
        &self.columns
    }

    /// Whether the table can be saved as it stands.
    pub fn can_save(&self) -> bool {
        self.report.can_save
    }

    /// Why the table cannot be saved yet (empty when it can).
    pub fn blocking_reasons(&self) -> Vec<String> {
        let mut out = Vec::new();
        if self.report.key.is_none() {
            out.push("no key column was found; choose one".to_owned());
        }
        out.extend(self.report.problems.iter().filter(|p| p.blocks_saving).map(|p| p.message.clone()));
        out
    }
}

/// Imports a file from disk. The size limit is checked before the file is read.
pub fn import_file(path: &Path, options: &ImportOptions) -> Result<StagedImport> {
    let meta = std::fs::metadata(path).map_err(|e| StoreError::io("read", path, e))?;
    if let Some(limit) = options.limits.max_bytes
        && meta.len() > limit
    {
        return Err(StoreError::TooLarge { bytes: meta.len(), limit });
    }
    let bytes = std::fs::read(path).map_err(|e| StoreError::io("read", path, e))?;
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    import_bytes(&bytes, &name, options)
}

/// Imports a file held in memory (an upload).
pub fn import_bytes(bytes: &[u8], file_name: &str, options: &ImportOptions) -> Result<StagedImport> {
    let size = bytes.len() as u64;
    if let Some(limit) = options.limits.max_bytes
        && size > limit
    {
        return Err(StoreError::TooLarge { bytes: size, limit });
    }
    if bytes.is_empty() {
        return Err(StoreError::EmptyFile);
    }
    let is_zip = bytes.starts_with(b"PK\x03\x04");
    let is_ole = bytes.starts_with(&[0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1]);
    let format = match options.format {
        Format::Auto if is_zip => Format::Xlsx,
        Format::Auto if is_ole => return Err(StoreError::LegacyWorkbook),
        Format::Auto => Format::Csv,
        other => other,
    };
    match format {
        Format::Xlsx => {
            if is_ole {
                return Err(StoreError::LegacyWorkbook);
            }
            let book = crate::xlsx::read_sheet(bytes, options)?;
            let source = SourceInfo {
                file_name: file_name.to_owned(),
                format: "xlsx".into(),
                bytes: size,
                encoding: String::new(),
                delimiter: None,
                delimiter_note: None,
                decimal_separator: None,
                decimal_note: None,
                sheet: Some(book.sheet.clone()),
                sheets: book.sheets.clone(),
            };
            let ctx = Context { decimal_comma: false, source, formulas: book.formulas, notes: book.notes };
            build(&book.grid, ctx, options)
        }
        Format::Csv | Format::Auto => {
            let decoded = text::decode(bytes, options.encoding)?;
            let text: &str = &decoded.text;
            if text.trim().is_empty() {
                return Err(StoreError::EmptyFile);
            }
            let layout = crate::csv::sniff(text, options.delimiter, options.decimal)?;
            let threads = worker_count(options);
            let src = CsvSource::new(
                text,
                &layout,
                threads,
                options.limits.max_cell_bytes,
                options.limits.max_columns,
            )?;
            let source = SourceInfo {
                file_name: file_name.to_owned(),
                format: "csv".into(),
                bytes: size,
                encoding: decoded.encoding.to_owned(),
                delimiter: Some(layout.delimiter.name().to_owned()),
                delimiter_note: Some(layout.delimiter_note.clone()),
                decimal_separator: Some(if layout.decimal_comma { "comma" } else { "point" }.to_owned()),
                decimal_note: Some(layout.decimal_note.clone()),
                sheet: None,
                sheets: Vec::new(),
            };
            let ctx = Context {
                decimal_comma: layout.decimal_comma,
                source,
                formulas: Vec::new(),
                notes: Vec::new(),
            };
            build_csv(src, ctx, options)
        }
    }
}

/// A formula found in a worksheet cell.
#[derive(Debug, Clone)]
pub(crate) struct FormulaCell {
    pub column: usize,
    pub row: usize,
    pub formula: String,
}

/// What the format reader hands to the builder besides the records.
pub(crate) struct Context {
    pub decimal_comma: bool,
    pub source: SourceInfo,
    pub formulas: Vec<FormulaCell>,
    pub notes: Vec<String>,
}

/// Builds from a CSV source, retrying on one part when a split fell inside a record.
fn build_csv(mut src: CsvSource<'_>, ctx: Context, options: &ImportOptions) -> Result<StagedImport> {
    if src.parts() > 1 && options.drop_rows.is_empty() {
        match scan_all(&src, &ctx, options, true) {
            Ok(Some(scan)) => return finish(&src, scan, ctx, options),
            Ok(None) | Err(_) => src.single_part(),
        }
    } else {
        src.single_part();
    }
    build(&src, ctx, options)
}

fn build<S: RecordSource>(src: &S, ctx: Context, options: &ImportOptions) -> Result<StagedImport> {
    let scan = scan_all(src, &ctx, options, false)?
        .ok_or_else(|| StoreError::Frame("the file could not be split into rows".into()))?;
    finish(src, scan, ctx, options)
}

// ---------------------------------------------------------------------------------------
// Pass 1: structure, classification and numbers.

/// The first-pass state of one column in one part.
#[derive(Default)]
struct ColScan {
    counts: ClassCounts,
    /// One value per kept data row; NaN where the cell is not a number.
    values: Vec<f64>,
    /// The first non-number cells: (record ordinal in the part, text).
    examples: Vec<(usize, String)>,
    /// The first cell with a fractional part.
    first_decimal: Option<(usize, String)>,
}

/// The first-pass result of one part.
#[derive(Default)]
struct PartScan {
    /// Records seen, blank lines included.
    records: usize,
    /// Ordinal (within the part) of every kept data row.
    ordinals: Vec<usize>,
    cols: Vec<ColScan>,
    /// First record with the wrong field count: (ordinal, byte offset, fields).
    ragged: Option<(usize, usize, usize)>,
    ragged_total: usize,
    blanks: usize,
    /// First cell over the length limit: (ordinal, column, bytes).
    too_long: Option<(usize, usize, usize)>,
    /// Dropped rows: (row number, cells).
    dropped: Vec<(usize, Vec<String>)>,
    clean: bool,
}

/// All parts' first-pass results, in order, with the ordinal offset of each part.
struct Scan {
    parts: Vec<PartScan>,
    offsets: Vec<usize>,
}

fn check_header(header: &[String], limits: &Limits) -> Result<()> {
    if header.len() > limits.max_columns {
        return Err(StoreError::TooManyColumns { found: header.len(), limit: limits.max_columns });
    }
    let mut seen: HashMap<&str, usize> = HashMap::new();
    for (i, name) in header.iter().enumerate() {
        if name.is_empty() {
            return Err(StoreError::BlankHeader { position: i + 1 });
        }
        if let Some(&first) = seen.get(name.as_str()) {
            return Err(StoreError::DuplicateHeader { name: name.clone(), first: first + 1, second: i + 1 });
        }
        seen.insert(name, i);
    }
    Ok(())
}

fn check_options(header: &[String], options: &ImportOptions) -> Result<()> {
    let known = |name: &str| -> Result<()> {
        if header.iter().any(|h| h == name) {
            Ok(())
        } else {
            Err(StoreError::UnknownColumn { name: name.to_owned() })
        }
    };
    if let Some(k) = &options.key {
        known(k)?;
    }
    for name in options.types.keys().chain(options.roles.keys()).chain(options.text_as_missing.iter()) {
        known(name)?;
    }
    for d in &options.drop_rows {
        if d.reason.trim().is_empty() {
            return Err(StoreError::BadChoice { reason: format!("dropping row {} needs a reason", d.row) });
        }
    }
    let key_roles: Vec<&String> =
        options.roles.iter().filter(|(_, r)| **r == ColumnRole::Key).map(|(name, _)| name).collect();
    if key_roles.len() > 1 {
        return Err(StoreError::BadChoice { reason: "only one column can have the key role".into() });
    }
    if let (Some(k), Some(r)) = (&options.key, key_roles.first())
        && k != *r
    {
        return Err(StoreError::BadChoice {
            reason: format!("the key is {k:?} but the key role was given to {r:?}"),
        });
    }
    Ok(())
}

/// Runs the first pass over every part. With `parallel`, parts run on threads and `None`
/// is returned when any part did not end on its boundary (the split fell inside a record).
fn scan_all<S: RecordSource>(
    src: &S,
    ctx: &Context,
    options: &ImportOptions,
    parallel: bool,
) -> Result<Option<Scan>> {
    let header = src.header();
    check_header(header, &options.limits)?;
    check_options(header, options)?;
    let ncols = header.len();
    let drops: HashSet<usize> = options.drop_rows.iter().map(|d| d.row).collect();
    let run =
        |part: usize| scan_part(src, part, ncols, ctx.decimal_comma, options.limits.max_cell_bytes, &drops);
    let parts: Vec<PartScan> = if parallel {
        let results: Vec<Result<PartScan>> = std::thread::scope(|s| {
            let handles: Vec<_> = (0..src.parts()).map(|p| s.spawn(move || run(p))).collect();
            handles
                .into_iter()
                .map(|h| h.join().unwrap_or_else(|_| Err(StoreError::Frame("a reader thread failed".into()))))
                .collect()
        });
        let mut parts = Vec::with_capacity(results.len());
        for r in results {
            match r {
                Ok(p) if p.clean && p.too_long.is_none() => parts.push(p),
                _ => return Ok(None),
            }
        }
        parts
    } else {
        (0..src.parts()).map(run).collect::<Result<Vec<_>>>()?
    };
    let mut offsets = Vec::with_capacity(parts.len());
    let mut total = 0;
    for p in &parts {
        offsets.push(total);
        total += p.records;
    }
    let scan = Scan { parts, offsets };
    // Structural refusals, in file order.
    let first_row = src.header_row() + 1;
    for (p, off) in scan.parts.iter().zip(&scan.offsets) {
        if let Some((ord, col, bytes)) = p.too_long {
            return Err(StoreError::CellTooLong {
                row: first_row + off + ord,
                column: header[col].clone(),
                bytes,
                limit: options.limits.max_cell_bytes,
            });
        }
    }
    let ragged_total: usize = scan.parts.iter().map(|p| p.ragged_total).sum();
    if let Some((p, off)) = scan.parts.iter().zip(&scan.offsets).find(|(p, _)| p.ragged.is_some())
        && let Some((ord, offset, found)) = p.ragged
    {
        return Err(StoreError::RaggedRows {
            row: first_row + off + ord,
            line: src.line_of(offset),
            found,
            expected: ncols,
            total: ragged_total,
        });
    }
    Ok(Some(scan))
}

fn scan_part<S: RecordSource>(
    src: &S,
    part: usize,
    ncols: usize,
    decimal_comma: bool,
    max_cell: usize,
    drops: &HashSet<usize>,
) -> Result<PartScan> {
    let first_row = src.header_row() + 1;
    let mut out = PartScan { cols: (0..ncols).map(|_| ColScan::default()).collect(), ..PartScan::default() };
    let mut stop = false;
    let visit = src.visit(part, &mut |row: &Row<'_>| {
        let ord = out.records;
        out.records += 1;
        if row.is_blank() {
            out.blanks += 1;
            return Ok(());
        }
        if row.len() != ncols {
            out.ragged_total += 1;
            if out.ragged.is_none() {
                out.ragged = Some((ord, row.offset(), row.len()));
            }
            return Ok(());
        }
        if out.ragged.is_some() {
            // The file will be refused; only the count of ragged rows matters now.
            return Ok(());
        }
        for c in 0..ncols {
            let len = row.raw_len(c);
            if len > max_cell {
                out.too_long = Some((ord, c, len));
                stop = true;
                // Any error value stops the visit; the caller reads `too_long`.
                return Err(StoreError::EmptyFile);
            }
        }
        if !drops.is_empty() && drops.contains(&(first_row + ord)) {
            out.dropped.push((first_row + ord, (0..ncols).map(|c| row.cell(c).into_owned()).collect()));
            return Ok(());
        }
        out.ordinals.push(ord);
        for (c, col) in out.cols.iter_mut().enumerate() {
            let cell = row.cell(c);
            let (class, v) = infer::classify(&cell, decimal_comma);
            col.counts.add(class);
            match class {
                CellClass::Int => col.values.push(v),
                CellClass::Decimal => {
                    col.values.push(v);
                    if col.first_decimal.is_none() {
                        col.first_decimal = Some((ord, cell.into_owned()));
                    }
                }
                CellClass::Missing => col.values.push(f64::NAN),
                CellClass::Text | CellClass::IntLeadingZero | CellClass::LongDigits => {
                    col.values.push(f64::NAN);
                    if col.examples.len() < EXAMPLES {
                        col.examples.push((ord, infer::trim_blank(&cell).to_owned()));
                    }
                }
            }
        }
        Ok(())
    });
    match visit {
        Ok(clean) => out.clean = clean,
        Err(_) if stop => out.clean = false,
        Err(e) => return Err(e),
    }
    Ok(out)
}

// ---------------------------------------------------------------------------------------
// Pass 2 and the report.

/// Reads the text columns of one part.
fn text_part<S: RecordSource>(
    src: &S,
    part: usize,
    ncols: usize,
    text_cols: &[usize],
    header: &[String],
    drops: &HashSet<usize>,
    expected_rows: usize,
) -> Result<Vec<StringChunked>> {
    let first_row = src.header_row() + 1;
    let mut builders: Vec<StringChunkedBuilder> = text_cols
        .iter()
        .map(|&c| StringChunkedBuilder::new(PlSmallStr::from_str(&header[c]), expected_rows))
        .collect();
    let mut ord = 0usize;
    src.visit(part, &mut |row: &Row<'_>| {
        let this = ord;
        ord += 1;
        if row.is_blank() || row.len() != ncols || (!drops.is_empty() && drops.contains(&(first_row + this)))
        {
            return Ok(());
        }
        for (b, &c) in builders.iter_mut().zip(text_cols) {
            let cell = row.cell(c);
            let t = infer::trim_blank(&cell);
            if t.is_empty() { b.append_null() } else { b.append_value(t) }
        }
        Ok(())
    })?;
    Ok(builders.into_iter().map(StringChunkedBuilder::finish).collect())
}

/// Numeric summary of one column.
#[derive(Debug, Clone, Copy, Default)]
struct NumStats {
    count: usize,
    min: Option<f64>,
    max: Option<f64>,
    mean: Option<f64>,
    median: Option<f64>,
}

fn num_stats(chunks: &[Vec<f64>]) -> NumStats {
    let mut count = 0usize;
    let (mut min, mut max) = (f64::INFINITY, f64::NEG_INFINITY);
    // Neumaier-compensated sum.
    let (mut sum, mut comp) = (0.0f64, 0.0f64);
    for v in chunks.iter().flatten().copied().filter(|v| !v.is_nan()) {
        count += 1;
        min = min.min(v);
        max = max.max(v);
        let t = sum + v;
        if sum.abs() >= v.abs() {
            comp += (sum - t) + v
        } else {
            comp += (v - t) + sum
        }
        sum = t;
    }
    if count == 0 {
        return NumStats::default();
    }
    let mut all: Vec<f64> = Vec::with_capacity(count);
    all.extend(chunks.iter().flatten().copied().filter(|v| !v.is_nan()));
    let mid = count / 2;
    let (_, upper, _) = all.select_nth_unstable_by(mid, f64::total_cmp);
    let upper = *upper;
    let median = if count % 2 == 1 {
        upper
    } else {
        let lower = all[..mid].iter().copied().fold(f64::NEG_INFINITY, f64::max);
        lower / 2.0 + upper / 2.0
    };
    let mean = (sum + comp) / count as f64;
    NumStats {
        count,
        min: Some(min),
        max: Some(max),
        mean: mean.is_finite().then_some(mean),
        median: Some(median),
    }
}

/// Builds a numeric column from its first-pass values (NaN marks a missing cell), keeping
/// one chunk per part so every column has the same chunk layout.
fn numeric_series(name: &str, ty: ColumnType, chunks: Vec<Vec<f64>>) -> Result<Series> {
    let name = PlSmallStr::from_str(name);
    let mut parts = chunks.into_iter();
    let first = parts.next().unwrap_or_default();
    if ty == ColumnType::Integer {
        // Integers have at most 15 digits, so the conversion is exact.
        let build = |chunk: Vec<f64>| {
            Int64Chunked::from_iter_options(
                name.clone(),
                chunk.into_iter().map(|v| (!v.is_nan()).then_some(v as i64)),
            )
        };
        let mut ca = build(first);
        for chunk in parts {
            ca.append_owned(build(chunk))?;
        }
        Ok(ca.into_series())
    } else {
        let build = |chunk: Vec<f64>| {
            Float64Chunked::from_iter_options(
                name.clone(),
                chunk.into_iter().map(|v| (!v.is_nan()).then_some(v)),
            )
        };
        let mut ca = build(first);
        for chunk in parts {
            ca.append_owned(build(chunk))?;
        }
        Ok(ca.into_series())
    }
}

/// The values of a numeric column as `f64`.
fn series_values(series: &Series) -> Result<Vec<Option<f64>>> {
    Ok(match series.dtype() {
        DataType::Int64 => series.i64()?.iter().map(|v| v.map(|x| x as f64)).collect(),
        _ => series.f64()?.iter().collect(),
    })
}

/// Worker threads for large inputs: as asked, or up to four as the machine allows.
fn worker_count(options: &ImportOptions) -> usize {
    if options.threads == 0 {
        std::thread::available_parallelism().map_or(1, |n| n.get()).min(4)
    } else {
        options.threads
    }
}

/// Formats a number for a problem cell.
fn show(v: f64) -> String {
    if v.fract() == 0.0 && v.abs() < 1e15 { format!("{}", v as i64) } else { format!("{v}") }
}

fn finish<S: RecordSource>(
    src: &S,
    scan: Scan,
    ctx: Context,
    options: &ImportOptions,
) -> Result<StagedImport> {
    let header = src.header().to_vec();
    let ncols = header.len();
    let first_row = src.header_row() + 1;
    let Scan { mut parts, offsets } = scan;
    let blanks: usize = parts.iter().map(|p| p.blanks).sum();

    // Row numbers of the kept rows.
    let mut row_numbers: Vec<usize> = Vec::with_capacity(parts.iter().map(|p| p.ordinals.len()).sum());
    for (p, off) in parts.iter().zip(&offsets) {
        row_numbers.extend(p.ordinals.iter().map(|o| first_row + off + o));
    }
    // Dropped rows must all exist.
    let dropped_cells: Vec<(usize, Vec<String>)> =
        parts.iter_mut().flat_map(|p| std::mem::take(&mut p.dropped)).collect();
    for d in &options.drop_rows {
        if !dropped_cells.iter().any(|(r, _)| *r == d.row) {
            let last =
                first_row + offsets.last().copied().unwrap_or(0) + parts.last().map_or(0, |p| p.records);
            return Err(StoreError::BadChoice {
                reason: format!(
                    "row {} cannot be dropped: it is not a data row (data rows are {first_row} to {})",
                    d.row,
                    last.saturating_sub(1)
                ),
            });
        }
    }
    if row_numbers.is_empty() {
        return Err(if dropped_cells.is_empty() {
            StoreError::HeaderOnly
        } else {
            StoreError::BadChoice { reason: "every data row was dropped".into() }
        });
    }
    let nrows = row_numbers.len();

    // Merge class counts and examples per column.
    let mut counts = vec![ClassCounts::default(); ncols];
    let mut examples: Vec<Vec<ProblemCell>> = vec![Vec::new(); ncols];
    let mut first_decimal: Vec<Option<ProblemCell>> = vec![None; ncols];
    for (p, off) in parts.iter_mut().zip(&offsets) {
        for (c, col) in p.cols.iter_mut().enumerate() {
            counts[c].merge(&col.counts);
            for (ord, value) in col.examples.drain(..) {
                if examples[c].len() < EXAMPLES {
                    examples[c].push(ProblemCell { row: first_row + off + ord, value });
                }
            }
            if first_decimal[c].is_none()
                && let Some((ord, value)) = col.first_decimal.take()
            {
                first_decimal[c] = Some(ProblemCell { row: first_row + off + ord, value });
            }
        }
    }

    // Key: chosen, given the key role, named like one, or the first complete text or
    // whole-number column.
    let inferred: Vec<(ColumnType, String)> = counts.iter().map(infer::infer_type).collect();
    let role_key = options.roles.iter().find(|(_, r)| **r == ColumnRole::Key).map(|(n, _)| n.clone());
    let (key, key_note) = if let Some(k) = options.key.clone().or(role_key) {
        let note = format!("{k:?} was chosen as the key");
        (Some(header.iter().position(|h| *h == k).unwrap_or(0)), note)
    } else {
        let by_name = (0..ncols)
            .filter(|&c| {
                infer::key_name_score(&header[c]) > 0
                    && !options.types.get(&header[c]).is_some_and(|t| t.is_numeric())
            })
            .max_by_key(|&c| (infer::key_name_score(&header[c]), std::cmp::Reverse(c)));
        match by_name {
            Some(c) => (
                Some(c),
                format!(
                    "{:?} was taken as the key because of its name; choose another if that is wrong",
                    header[c]
                ),
            ),
            None => {
                let complete = (0..ncols).find(|&c| {
                    counts[c].missing == 0
                        && matches!(inferred[c].0, ColumnType::Text | ColumnType::Integer)
                        && !options.types.get(&header[c]).is_some_and(|t| t.is_numeric())
                });
                match complete {
                    Some(c) => (
                        Some(c),
                        format!(
                            "{:?} was taken as the key: it is the first column with a value on every row; choose another if that is wrong",
                            header[c]
                        ),
                    ),
                    None => (None, "no column looks like a region key; choose one".to_owned()),
                }
            }
        }
    };

    // Types.
    let mut types = Vec::with_capacity(ncols);
    for c in 0..ncols {
        let chosen = options.types.get(&header[c]).copied();
        let ty = if Some(c) == key {
            if chosen.is_some_and(|t| t.is_numeric()) {
                return Err(StoreError::BadChoice {
                    reason: format!(
                        "the key column {:?} must be text; it cannot be {}",
                        header[c],
                        chosen.map_or("", |t| t.name())
                    ),
                });
            }
            ColumnType::Text
        } else {
            chosen.unwrap_or(inferred[c].0)
        };
        if ty == ColumnType::Integer
            && chosen == Some(ColumnType::Integer)
            && let Some(cell) = &first_decimal[c]
        {
            return Err(StoreError::BadChoice {
                reason: format!(
                    "column {:?} holds {} values with a fractional part (row {}: {}); choose decimal instead of integer",
                    header[c], counts[c].decimal, cell.row, cell.value
                ),
            });
        }
        types.push(ty);
    }

    // Pass 2: text columns. Their first-pass numbers are not needed.
    let text_cols: Vec<usize> = (0..ncols).filter(|&c| types[c] == ColumnType::Text).collect();
    for p in parts.iter_mut() {
        for &c in &text_cols {
            p.cols[c].values = Vec::new();
        }
    }
    let drops: HashSet<usize> = options.drop_rows.iter().map(|d| d.row).collect();
    let mut text_chunks: Vec<Vec<StringChunked>> = vec![Vec::new(); ncols];
    if !text_cols.is_empty() {
        let expected: Vec<usize> = parts.iter().map(|p| p.ordinals.len()).collect();
        let run = |p: usize| text_part(src, p, ncols, &text_cols, &header, &drops, expected[p]);
        let results: Vec<Result<Vec<StringChunked>>> = if src.parts() > 1 {
            std::thread::scope(|s| {
                let handles: Vec<_> = (0..src.parts()).map(|p| s.spawn(move || run(p))).collect();
                handles
                    .into_iter()
                    .map(|h| {
                        h.join().unwrap_or_else(|_| Err(StoreError::Frame("a reader thread failed".into())))
                    })
                    .collect()
            })
        } else {
            (0..src.parts()).map(run).collect()
        };
        for r in results {
            for (ca, &c) in r?.into_iter().zip(&text_cols) {
                text_chunks[c].push(ca);
            }
        }
    }

    // Numeric columns: statistics and typed arrays, built on worker threads column by
    // column; each column's first-pass values are freed as soon as its array exists.
    let mut built: Vec<Option<(NumStats, Series)>> = (0..ncols).map(|_| None).collect();
    let work: Vec<(usize, Vec<Vec<f64>>)> = (0..ncols)
        .filter(|&c| types[c] != ColumnType::Text)
        .map(|c| (c, parts.iter_mut().map(|p| std::mem::take(&mut p.cols[c].values)).collect()))
        .collect();
    let threads = if nrows < 50_000 { 1 } else { worker_count(options).min(work.len()).max(1) };
    let mut buckets: Vec<Vec<(usize, Vec<Vec<f64>>)>> = (0..threads).map(|_| Vec::new()).collect();
    for (i, item) in work.into_iter().enumerate() {
        buckets[i % threads].push(item);
    }
    let build_bucket = |bucket: Vec<(usize, Vec<Vec<f64>>)>| -> Result<Vec<(usize, NumStats, Series)>> {
        bucket
            .into_iter()
            .map(|(c, chunks)| {
                let stats = num_stats(&chunks);
                let series = numeric_series(&header[c], types[c], chunks)?;
                Ok((c, stats, series))
            })
            .collect()
    };
    let results: Vec<Result<Vec<(usize, NumStats, Series)>>> = if threads == 1 {
        buckets.into_iter().map(build_bucket).collect()
    } else {
        std::thread::scope(|s| {
            let handles: Vec<_> = buckets.into_iter().map(|b| s.spawn(move || build_bucket(b))).collect();
            handles
                .into_iter()
                .map(|h| h.join().unwrap_or_else(|_| Err(StoreError::Frame("a worker thread failed".into()))))
                .collect()
        })
    };
    for r in results {
        for (c, stats, series) in r? {
            built[c] = Some((stats, series));
        }
    }

    // Assemble columns, statistics and problems.
    let mut frame_cols = Vec::with_capacity(ncols);
    let mut summaries = Vec::with_capacity(ncols);
    let mut problems: Vec<Problem> = Vec::new();
    let mut manifest_cols = Vec::with_capacity(ncols);
    let mut key_values: Option<StringChunked> = None;
    for c in 0..ncols {
        let name = &header[c];
        let ty = types[c];
        let is_key = Some(c) == key;
        let (inferred_ty, type_note) = if is_key {
            (inferred[c].0, "text: the region key is kept exactly as written".to_owned())
        } else if let Some(t) = options.types.get(name) {
            (inferred[c].0, format!("{} (chosen; the values suggested {})", t.name(), inferred[c].0.name()))
        } else {
            (inferred[c].0, inferred[c].1.clone())
        };
        let mut summary = ColumnSummary {
            column: name.clone(),
            column_type: ty,
            inferred_type: inferred_ty,
            type_note,
            role: ColumnRole::Indicator,
            role_note: String::new(),
            count: 0,
            missing: 0,
            distinct: None,
            min: None,
            max: None,
            mean: None,
            median: None,
        };
        let mut negatives: Vec<(usize, f64)> = Vec::new();
        let mut negative_total = 0usize;
        let role;
        if ty == ColumnType::Text {
            // One chunk per part, so every column has the same chunk layout.
            let mut parts_iter = std::mem::take(&mut text_chunks[c]).into_iter();
            let mut ca = parts_iter.next().unwrap_or_else(|| {
                StringChunked::from_iter_options(
                    PlSmallStr::from_str(name),
                    std::iter::empty::<Option<&str>>(),
                )
            });
            for chunk in parts_iter {
                ca.append_owned(chunk)?;
            }
            let mut distinct: HashSet<&str> = HashSet::new();
            let mut first_value: Option<(usize, &str)> = None;
            let mut count = 0usize;
            for (i, v) in ca.iter().enumerate() {
                if let Some(v) = v {
                    count += 1;
                    // The key's distinct values are counted with the key checks below.
                    if !is_key {
                        distinct.insert(v);
                    }
                    if first_value.is_none() {
                        first_value = Some((row_numbers[i], v));
                    }
                }
            }
            summary.count = count;
            summary.missing = nrows - count;
            summary.distinct = Some(distinct.len());
            let (r, note) = role_for(name, is_key, ty, None, options)?;
            role = r;
            summary.role = r;
            summary.role_note = note;
            if !is_key {
                if count == 0 {
                    problems.push(empty_problem(name));
                } else if distinct.len() == 1 && count >= 2 {
                    problems.push(constant_problem(name, first_value));
                }
            }
            if is_key {
                key_values = Some(ca.clone());
            }
            frame_cols.push(ca.into_series().into_column());
        } else {
            let (stats, series) =
                built[c].take().ok_or_else(|| StoreError::Frame(format!("column {name:?} was not built")))?;
            summary.count = stats.count;
            summary.missing = nrows - stats.count;
            summary.min = stats.min;
            summary.max = stats.max;
            summary.mean = stats.mean;
            summary.median = stats.median;
            let (r, note) = role_for(name, is_key, ty, stats.min, options)?;
            role = r;
            summary.role = r;
            summary.role_note = note;
            if matches!(r, ColumnRole::Count | ColumnRole::Population) && stats.min.is_some_and(|m| m < 0.0) {
                for (i, v) in series_values(&series)?.into_iter().enumerate() {
                    if let Some(v) = v.filter(|v| *v < 0.0) {
                        negative_total += 1;
                        if negatives.len() < EXAMPLES {
                            negatives.push((row_numbers[i], v));
                        }
                    }
                }
            }
            // Text in a numeric column.
            let bad = counts[c].non_numbers();
            if bad > 0 {
                let accepted = options.text_as_missing.contains(name);
                problems.push(Problem {
                    kind: ProblemKind::TextInNumeric,
                    column: name.clone(),
                    message: if accepted {
                        format!(
                            "column {name:?} has {}; read as missing, as chosen",
                            count(bad, "cell that is not a number", "cells that are not numbers")
                        )
                    } else {
                        format!("column {name:?} has {}", count(bad, "cell that is not a number", "cells that are not numbers"))
                    },
                    total: bad,
                    examples: examples[c].clone(),
                    blocks_saving: !accepted,
                    remedy: "change the column's type to text, drop those rows with a reason, or choose to read such cells as missing".into(),
                });
            }
            if stats.count == 0 {
                problems.push(empty_problem(name));
            } else if stats.count >= 2 && stats.min == stats.max {
                let first = series_values(&series)?
                    .iter()
                    .position(Option::is_some)
                    .map(|i| row_numbers[i])
                    .unwrap_or(first_row);
                let value = stats.min.map(show).unwrap_or_default();
                problems.push(constant_problem(name, Some((first, value.as_str()))));
            }
            frame_cols.push(series.into_column());
        }
        if negative_total > 0 {
            problems.push(Problem {
                kind: ProblemKind::NegativeCount,
                column: name.clone(),
                message: format!(
                    "column {name:?} is a {} but has {}",
                    role.name(),
                    count(negative_total, "negative value", "negative values")
                ),
                total: negative_total,
                examples: negatives
                    .iter()
                    .map(|(row, v)| ProblemCell { row: *row, value: show(*v) })
                    .collect(),
                blocks_saving: true,
                remedy: "drop those rows with a reason, or change the column's role if it is not a count"
                    .into(),
            });
        }
        manifest_cols.push(ManifestColumn { column_type: ty, meta: ColumnMeta::new(name.clone(), role) });
        summaries.push(summary);
    }

    // Key checks.
    if let (Some(kc), Some(keys)) = (key, key_values.as_ref()) {
        let name = &header[kc];
        let summary_index = kc;
        let mut blank_rows = Vec::new();
        // Occurrences per key; rows are collected only for keys seen more than once.
        let mut seen: HashMap<&str, u32> = HashMap::with_capacity(nrows);
        for (i, v) in keys.iter().enumerate() {
            match v {
                None => blank_rows.push(row_numbers[i]),
                Some(k) => *seen.entry(k).or_default() += 1,
            }
        }
        summaries[summary_index].distinct = Some(seen.len());
        if !blank_rows.is_empty() {
            problems.insert(
                0,
                Problem {
                    kind: ProblemKind::BlankKey,
                    column: name.clone(),
                    message: format!(
                        "{} in column {name:?}",
                        count(blank_rows.len(), "row has no key", "rows have no key")
                    ),
                    total: blank_rows.len(),
                    examples: blank_rows
                        .iter()
                        .take(EXAMPLES)
                        .map(|&row| ProblemCell { row, value: String::new() })
                        .collect(),
                    blocks_saving: true,
                    remedy: "drop those rows with a reason, fix the file, or choose another key column"
                        .into(),
                },
            );
        }
        let keys_repeated = seen.values().filter(|&&n| n > 1).count();
        if keys_repeated > 0 {
            let dup: Vec<(usize, &str)> = keys
                .iter()
                .enumerate()
                .filter_map(|(i, v)| {
                    v.filter(|k| seen.get(k).is_some_and(|&n| n > 1)).map(|k| (row_numbers[i], k))
                })
                .collect();
            problems.insert(
                0,
                Problem {
                    kind: ProblemKind::DuplicateKey,
                    column: name.clone(),
                    message: format!(
                        "{} in column {name:?} on more than one row ({} rows)",
                        count(keys_repeated, "key appears", "keys appear"),
                        dup.len()
                    ),
                    total: dup.len(),
                    examples: dup
                        .iter()
                        .take(EXAMPLES)
                        .map(|&(row, k)| ProblemCell { row, value: k.to_owned() })
                        .collect(),
                    blocks_saving: true,
                    remedy: "drop the extra rows with a reason, fix the file, or choose another key column"
                        .into(),
                },
            );
        }
    }

    // Formulas in worksheet cells.
    let mut by_col: BTreeMap<usize, Vec<&FormulaCell>> = BTreeMap::new();
    for f in &ctx.formulas {
        if !drops.contains(&f.row) && f.column < ncols {
            by_col.entry(f.column).or_default().push(f);
        }
    }
    for (c, cells) in by_col {
        problems.push(Problem {
            kind: ProblemKind::Formula,
            column: header[c].clone(),
            message: format!(
                "column {:?} has {}; the values used are the results the spreadsheet last saved",
                header[c],
                count(cells.len(), "cell holding a formula", "cells holding formulas")
            ),
            total: cells.len(),
            examples: cells.iter().take(EXAMPLES).map(|f| ProblemCell { row: f.row, value: f.formula.clone() }).collect(),
            blocks_saving: false,
            remedy: "check the values; if they may be stale, recalculate and save the workbook, or paste the values".into(),
        });
    }

    // Dropped rows with their keys.
    let reason_of: HashMap<usize, &str> =
        options.drop_rows.iter().map(|d| (d.row, d.reason.as_str())).collect();
    let dropped_rows: Vec<DroppedRow> = dropped_cells
        .iter()
        .map(|(row, cells)| DroppedRow {
            row: *row,
            key: key.and_then(|k| cells.get(k)).map(|s| infer::trim_blank(s).to_owned()).unwrap_or_default(),
            reason: reason_of.get(row).copied().unwrap_or_default().to_owned(),
        })
        .collect();

    let mut notes = ctx.notes;
    if blanks > 0 {
        notes.push(format!(
            "{} skipped; blank lines keep their place in the row numbering",
            count(blanks, "blank line was", "blank lines were")
        ));
    }
    let frame = DataFrame::new(nrows, frame_cols)?;
    let can_save = key.is_some() && problems.iter().all(|p| !p.blocks_saving);
    let report = ImportReport {
        schema_version: SCHEMA_VERSION.to_owned(),
        source: ctx.source,
        rows: nrows,
        key: key.map(|k| header[k].clone()),
        key_note,
        columns: summaries,
        problems,
        dropped_rows,
        notes,
        can_save,
    };
    Ok(StagedImport { report, frame, columns: manifest_cols })
}

fn role_for(
    name: &str,
    is_key: bool,
    ty: ColumnType,
    min: Option<f64>,
    options: &ImportOptions,
) -> Result<(ColumnRole, String)> {
    if is_key {
        return Ok((ColumnRole::Key, "the region key".into()));
    }
    if let Some(&r) = options.roles.get(name) {
        if ty == ColumnType::Text && r != ColumnRole::Group {
            return Err(StoreError::BadChoice {
                reason: format!(
                    "column {name:?} holds text, so it can only be a group; it cannot be a {}",
                    r.name()
                ),
            });
        }
        return Ok((r, "chosen".into()));
    }
    Ok(infer::infer_role(name, false, ValueFacts { column_type: ty, min }))
}

fn empty_problem(name: &str) -> Problem {
    Problem {
        kind: ProblemKind::EmptyColumn,
        column: name.to_owned(),
        message: format!("column {name:?} has no values"),
        total: 0,
        examples: Vec::new(),
        blocks_saving: false,
        remedy: "it cannot be used in a model; leave it or remove it from the file".into(),
    }
}

fn constant_problem(name: &str, first: Option<(usize, &str)>) -> Problem {
    let value = first.map(|(_, v)| v.to_owned()).unwrap_or_default();
    Problem {
        kind: ProblemKind::ConstantColumn,
        column: name.to_owned(),
        message: format!("column {name:?} holds the same value ({value}) on every row that has one"),
        total: 1,
        examples: first.map(|(row, v)| vec![ProblemCell { row, value: v.to_owned() }]).unwrap_or_default(),
        blocks_saving: false,
        remedy: "a constant column cannot explain differences between areas; check the export".into(),
    }
}

//! The store's error type: every refusal of an import and every storage failure, in plain words.

use std::path::PathBuf;

/// Formats a byte count for messages: whole bytes below 1 KiB, else one decimal in KB/MB/GB
/// (powers of 1024).
pub fn human_bytes(bytes: u64) -> String {
    const UNITS: [&str; 4] = ["KB", "MB", "GB", "TB"];
    if bytes < 1024 {
        return format!("{bytes} bytes");
    }
    let mut value = bytes as f64 / 1024.0;
    let mut unit = 0;
    while value >= 1024.0 && unit + 1 < UNITS.len() {
        value /= 1024.0;
        unit += 1;
    }
    format!("{value:.1} {}", UNITS[unit])
}

/// Everything that can go wrong in the store.
#[non_exhaustive]
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    // ---- Reading and writing files ----
    /// A file or folder could not be read or written.
    #[error("could not {action} {}: {source}", path.display())]
    Io {
        /// What was being done, e.g. "read", "write", "rename".
        action: &'static str,
        /// The file or folder.
        path: PathBuf,
        /// The operating system's reason.
        source: std::io::Error,
    },

    // ---- Limits ----
    /// The upload or file is larger than allowed.
    #[error("the file is {}, more than the {} allowed; nothing was stored", human_bytes(*bytes), human_bytes(*limit))]
    TooLarge {
        /// The size.
        bytes: u64,
        /// The limit.
        limit: u64,
    },
    /// The table has more columns than allowed.
    #[error("the table has {found} columns, more than the {limit} allowed; nothing was stored")]
    TooManyColumns {
        /// Columns found.
        found: usize,
        /// The limit.
        limit: usize,
    },
    /// One cell is longer than allowed.
    #[error(
        "row {row}, column {column:?} holds {bytes} bytes, more than the {limit} allowed in one cell; nothing was stored"
    )]
    CellTooLong {
        /// The row number (header = row 1).
        row: usize,
        /// The column name, or its position when the header itself is too long.
        column: String,
        /// The cell's length in bytes.
        bytes: usize,
        /// The limit.
        limit: usize,
    },

    // ---- Text encoding ----
    /// The bytes are not UTF-8 and no other encoding was chosen.
    #[error(
        "the file is not valid UTF-8 (byte 0x{byte:02X} on line {line} cannot start or continue a character); if it was saved as Windows-1252 or Latin-1, import it again choosing that encoding (--encoding windows-1252 or --encoding latin1)"
    )]
    InvalidUtf8 {
        /// The line of the first bad byte.
        line: usize,
        /// The first bad byte.
        byte: u8,
    },
    /// A UTF-16 file (by its byte-order mark) holds an invalid sequence.
    #[error(
        "the file starts with a UTF-16 byte-order mark but is not valid UTF-16 (broken character on line {line})"
    )]
    InvalidUtf16 {
        /// The line of the first broken character.
        line: usize,
    },

    // ---- File shape ----
    /// Nothing in the file.
    #[error("the file is empty")]
    EmptyFile,
    /// A header row and no data.
    #[error("the file has a header row but no data rows")]
    HeaderOnly,
    /// The header names no column at some position.
    #[error("column {position} has no name in the header row")]
    BlankHeader {
        /// The 1-based column position.
        position: usize,
    },
    /// Two header cells are the same.
    #[error("two columns are both named {name:?} (columns {first} and {second})")]
    DuplicateHeader {
        /// The repeated name.
        name: String,
        /// The 1-based position of the first.
        first: usize,
        /// The 1-based position of the second.
        second: usize,
    },
    /// No delimiter splits the lines.
    #[error("no field delimiter found: no line contains a comma, semicolon, tab or pipe outside quotes")]
    NoDelimiter,
    /// Several delimiters appear but none splits every line alike.
    #[error(
        "could not tell the field delimiter: none of comma, semicolon, tab or pipe gives the same number of fields on every line ({detail}); choose the delimiter"
    )]
    UnclearDelimiter {
        /// What the most likely delimiter gave.
        detail: String,
    },
    /// Some rows have a different number of fields from the header.
    #[error("row {row} (line {line}) has {found} fields but the header has {expected}; {} a different number of fields", if *total == 1 { "it is the only row with".to_owned() } else { format!("{total} rows in all have") })]
    RaggedRows {
        /// The first such row (header = row 1).
        row: usize,
        /// Its starting line.
        line: usize,
        /// Fields found.
        found: usize,
        /// Fields in the header.
        expected: usize,
        /// How many rows differ.
        total: usize,
    },
    /// A quote opened and never closed.
    #[error("a quoted field that starts on line {line} is never closed")]
    UnclosedQuote {
        /// The line where the quote opens.
        line: usize,
    },
    /// Characters after a closing quote and before the next delimiter.
    #[error("line {line}: text follows a closing quote before the next delimiter")]
    TextAfterQuote {
        /// The line.
        line: usize,
    },
    /// An old binary workbook.
    #[error("this is an old binary .xls workbook; save it as .xlsx or CSV and import that")]
    LegacyWorkbook,

    // ---- Workbooks ----
    /// Too many entries in the workbook's zip container.
    #[error("the workbook holds {entries} packed files, more than the {limit} allowed; it was not opened")]
    ZipTooManyEntries {
        /// Entries found.
        entries: usize,
        /// The limit.
        limit: usize,
    },
    /// The workbook would unpack to too many bytes.
    #[error("the workbook would unpack to {}, more than the {} allowed; it was not opened", human_bytes(*bytes), human_bytes(*limit))]
    ZipTooLarge {
        /// Total uncompressed size declared by the central directory.
        bytes: u64,
        /// The limit.
        limit: u64,
    },
    /// One entry is compressed suspiciously well.
    #[error(
        "the packed file {entry:?} in the workbook would expand {ratio} times, more than the {limit} times allowed; it was not opened"
    )]
    ZipRatio {
        /// The entry name.
        entry: String,
        /// Uncompressed / compressed, rounded down.
        ratio: u64,
        /// The limit.
        limit: u64,
    },
    /// The workbook could not be read.
    #[error("the workbook could not be read: {reason}")]
    Workbook {
        /// The reader's reason.
        reason: String,
    },
    /// The chosen sheet is not in the workbook.
    #[error("the workbook has no sheet named {sheet:?}; its sheets are: {available}")]
    NoSuchSheet {
        /// The sheet asked for.
        sheet: String,
        /// The sheets present, comma-separated.
        available: String,
    },
    /// The chosen sheet is empty.
    #[error("the sheet {sheet:?} is empty")]
    EmptySheet {
        /// The sheet.
        sheet: String,
    },

    // ---- The analyst's choices ----
    /// An option names a column the table does not have.
    #[error("there is no column named {name:?}")]
    UnknownColumn {
        /// The name.
        name: String,
    },
    /// A choice cannot be applied.
    #[error("{reason}")]
    BadChoice {
        /// Why.
        reason: String,
    },
    /// Saving refused because problems remain.
    #[error("the table was not saved: {reasons}")]
    NotSavable {
        /// The blocking problems, joined.
        reasons: String,
    },

    // ---- Building tables ----
    /// A join cannot proceed.
    #[error("cannot join: {reason}")]
    Join {
        /// Why.
        reason: String,
    },
    /// A derived column cannot be computed.
    #[error("cannot derive {name:?}: {reason}")]
    Derive {
        /// The derived column.
        name: String,
        /// Why.
        reason: String,
    },

    // ---- The data directory ----
    /// No stored dataset by that id or name.
    #[error("no stored table is called {name:?}")]
    UnknownDataset {
        /// The id or name.
        name: String,
    },
    /// No such version.
    #[error("the table {dataset:?} has no version {version}")]
    UnknownVersion {
        /// The dataset id.
        dataset: String,
        /// The version asked for.
        version: String,
    },
    /// A stored file does not match its checksum.
    #[error("{} is damaged: its checksum does not match the manifest", path.display())]
    Checksum {
        /// The file.
        path: PathBuf,
    },
    /// A stored or imported document cannot be read.
    #[error("{} cannot be read: {reason}", path.display())]
    BadDocument {
        /// The file.
        path: PathBuf,
        /// Why.
        reason: String,
    },
    /// No saved analysis with that id.
    #[error("no saved analysis has the id {id:?}")]
    UnknownAnalysis {
        /// The id.
        id: String,
    },
    /// A saved analysis is invalid.
    #[error("the analysis cannot be saved: {reason}")]
    BadAnalysis {
        /// Why.
        reason: String,
    },
    /// The columnar engine failed.
    #[error("table operation failed: {0}")]
    Frame(String),
    /// The regression engine refused the table.
    #[error(transparent)]
    Engine(#[from] wardcast_engine::EngineError),
    /// A contract document was refused.
    #[error(transparent)]
    Contract(#[from] wardcast_contract::ContractError),
}

impl From<polars::prelude::PolarsError> for StoreError {
    fn from(e: polars::prelude::PolarsError) -> Self {
        StoreError::Frame(e.to_string())
    }
}

impl StoreError {
    /// Builds an I/O error for a path.
    pub(crate) fn io(action: &'static str, path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        StoreError::Io { action, path: path.into(), source }
    }
}

/// Result alias for store operations.
pub type Result<T> = std::result::Result<T, StoreError>;

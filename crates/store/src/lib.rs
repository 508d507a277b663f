//! The dataset store: import, validate, join, derive and persist tables (polars).
//!
//! - [`import`]: read a CSV or XLSX file into a [`StagedImport`] with its validation report;
//!   nothing is stored until the analyst saves it.
//! - [`Store`]: the data directory of immutable dataset versions (Arrow IPC files beside JSON
//!   manifests with SHA-256 checksums) and saved analyses, written atomically and verified
//!   at start-up.
//! - [`Dataset`] and [`Draft`]: a loaded version, and a new version being prepared (joins,
//!   derived columns, metadata, exclusions).

pub mod csv;
pub mod error;
pub mod import;
pub mod infer;
mod source;
pub mod text;
pub mod xlsx;

pub use csv::{DecimalChoice, Delimiter};
pub use error::{Result, StoreError};
pub use import::{Format, ImportOptions, Limits, RowDrop, StagedImport, ZipLimits, import_bytes, import_file};
pub use infer::read_number;
pub use text::Encoding;

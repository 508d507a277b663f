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
pub mod dataset;
pub mod derive;
pub mod error;
mod frame;
mod fsutil;
pub mod import;
pub mod infer;
mod source;
pub mod store;
pub mod text;
pub mod xlsx;

pub use csv::{DecimalChoice, Delimiter};
pub use dataset::{Dataset, Draft, Joined, Keyed, engine_table, join};
pub use derive::DeriveSummary;
pub use error::{Result, StoreError};
pub use import::{
    Format, ImportOptions, Limits, RowDrop, StagedImport, ZipLimits, import_bytes, import_file,
};
pub use infer::read_number;
pub use store::{LoadReport, Store, slug};
pub use text::Encoding;

/// The checksum text (`sha256:<hex>`) the store records for some bytes.
pub fn content_checksum(bytes: &[u8]) -> String {
    fsutil::checksum(bytes)
}

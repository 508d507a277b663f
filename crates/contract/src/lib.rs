//! The JSON contract: serde types for model specs and every result document.
//!
//! The engine stays free of serde; this crate mirrors engine results as documents and maps
//! them (`From`/constructor functions live beside each document type). The CLI, the server
//! and the store all speak these types, and every document carries [`SCHEMA_VERSION`].

pub mod allocation;
pub mod areas;
pub mod cautions;
pub mod checks;
pub mod dataset;
pub mod error;
pub mod fit;
pub mod numbers;
pub mod scenario;
pub mod selection;
pub mod spec;
pub mod survey;

pub use error::{ContractError, Result};

/// Version of the JSON schema written into every document as `schema_version`.
///
/// Bump it when a field changes meaning or is removed; adding an optional field does not.
pub const SCHEMA_VERSION: &str = "wardcast.v1";

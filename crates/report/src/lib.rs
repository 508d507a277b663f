//! Reports: SVG charts and the budgeting brief built from engine results.
//!
//! The [`svg`] module draws every chart of the product as a self-contained SVG
//! string from plain data structs. The brief (HTML and PDF) will live beside it
//! in a `brief` module and embeds the same charts.

pub mod brief;
pub mod error;
pub mod svg;

pub use error::{ReportError, Result};

//! Benchmarks of CSV import, validation, persistence and model-matrix extraction.

use crate::report::Table;

/// Runs the store benchmarks.
pub fn run(_table: &mut Table) {}

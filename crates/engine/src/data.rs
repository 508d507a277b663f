//! The engine's own small table type: row keys plus named numeric or text columns.
//!
//! The store converts its data frames into a [`Table`]; the engine never reads files.

use std::collections::HashSet;

use crate::error::{EngineError, Result};

/// The values of one column; `None` marks a missing cell.
#[derive(Debug, Clone, PartialEq)]
pub enum ColumnData {
    /// Numbers (NaN and infinities are rejected when the column is used in a model).
    Numeric(Vec<Option<f64>>),
    /// Text, used as a categorical predictor.
    Text(Vec<Option<String>>),
}

impl ColumnData {
    /// Number of cells.
    pub fn len(&self) -> usize {
        match self {
            ColumnData::Numeric(v) => v.len(),
            ColumnData::Text(v) => v.len(),
        }
    }

    /// True when the column has no cells.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// True for a numeric column.
    pub fn is_numeric(&self) -> bool {
        matches!(self, ColumnData::Numeric(_))
    }

    /// True when cell `i` is missing.
    pub fn is_missing(&self, i: usize) -> bool {
        match self {
            ColumnData::Numeric(v) => v[i].is_none(),
            ColumnData::Text(v) => v[i].is_none(),
        }
    }
}

/// A named column.
#[derive(Debug, Clone, PartialEq)]
pub struct Column {
    /// The column's name.
    pub name: String,
    /// Its values.
    pub data: ColumnData,
}

impl Column {
    /// A numeric column with possibly missing cells.
    pub fn numeric(name: impl Into<String>, values: Vec<Option<f64>>) -> Self {
        Self { name: name.into(), data: ColumnData::Numeric(values) }
    }

    /// A numeric column without missing cells.
    pub fn from_f64(name: impl Into<String>, values: &[f64]) -> Self {
        Self::numeric(name, values.iter().copied().map(Some).collect())
    }

    /// A text column with possibly missing cells.
    pub fn text(name: impl Into<String>, values: Vec<Option<String>>) -> Self {
        Self { name: name.into(), data: ColumnData::Text(values) }
    }

    /// A text column without missing cells.
    pub fn from_strs(name: impl Into<String>, values: &[&str]) -> Self {
        Self::text(name, values.iter().map(|s| Some((*s).to_owned())).collect())
    }
}

/// A table of rows identified by a key (for example a district code), with named columns.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    keys: Vec<String>,
    columns: Vec<Column>,
}

impl Table {
    /// Builds a table; keys must be unique, column names unique and every column as long as the
    /// key list.
    pub fn new(keys: Vec<String>, columns: Vec<Column>) -> Result<Table> {
        let mut seen = HashSet::new();
        for k in &keys {
            if !seen.insert(k.as_str()) {
                return Err(EngineError::DuplicateKey { key: k.clone() });
            }
        }
        let mut names = HashSet::new();
        for c in &columns {
            if !names.insert(c.name.as_str()) {
                return Err(EngineError::DuplicateColumn { name: c.name.clone() });
            }
            if c.data.len() != keys.len() {
                return Err(EngineError::DimensionMismatch {
                    what: format!("number of values in column {}", c.name),
                    expected: keys.len(),
                    found: c.data.len(),
                });
            }
        }
        Ok(Table { keys, columns })
    }

    /// The row keys.
    pub fn keys(&self) -> &[String] {
        &self.keys
    }

    /// The column with this name, if any.
    pub fn column(&self, name: &str) -> Option<&Column> {
        self.columns.iter().find(|c| c.name == name)
    }

    /// All columns.
    pub fn columns(&self) -> &[Column] {
        &self.columns
    }

    /// Number of rows.
    pub fn nrows(&self) -> usize {
        self.keys.len()
    }
}

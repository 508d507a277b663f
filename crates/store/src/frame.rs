//! Small helpers over polars frames: typed reads of a column and row gathering.

use polars::prelude::{
    Column, DataFrame, DataType, Float64Chunked, Int64Chunked, IntoColumn, IntoSeries, NewChunkedArray,
    PlSmallStr, StringChunked,
};
use wardcast_contract::dataset::ColumnType;

use crate::error::{Result, StoreError};

/// The storage type of a frame column, if it is one the store writes.
pub(crate) fn column_type(col: &Column) -> Option<ColumnType> {
    match col.dtype() {
        DataType::Int64 => Some(ColumnType::Integer),
        DataType::Float64 => Some(ColumnType::Decimal),
        DataType::String => Some(ColumnType::Text),
        _ => None,
    }
}

fn column<'a>(frame: &'a DataFrame, name: &str) -> Result<&'a Column> {
    frame.column(name).map_err(|_| StoreError::UnknownColumn { name: name.to_owned() })
}

/// The values of a numeric column as `f64`; `None` when it is text.
pub(crate) fn f64_values(frame: &DataFrame, name: &str) -> Result<Option<Vec<Option<f64>>>> {
    let s = column(frame, name)?.as_materialized_series();
    Ok(match s.dtype() {
        DataType::Int64 => Some(s.i64()?.iter().map(|v| v.map(|x| x as f64)).collect()),
        DataType::Float64 => Some(s.f64()?.iter().collect()),
        _ => None,
    })
}

/// The values of a text column; `None` when it is not text.
pub(crate) fn text_values(frame: &DataFrame, name: &str) -> Result<Option<Vec<Option<String>>>> {
    let s = column(frame, name)?.as_materialized_series();
    Ok(match s.dtype() {
        DataType::String => Some(s.str()?.iter().map(|v| v.map(str::to_owned)).collect()),
        _ => None,
    })
}

/// The keys of a frame: every value present and distinct.
pub(crate) fn keys(frame: &DataFrame, key: &str) -> Result<Vec<String>> {
    let values = text_values(frame, key)?
        .ok_or_else(|| StoreError::BadChoice { reason: format!("the key column {key:?} must be text") })?;
    let mut out = Vec::with_capacity(values.len());
    let mut seen = std::collections::HashSet::with_capacity(values.len());
    for (i, v) in values.into_iter().enumerate() {
        let v = v.ok_or_else(|| StoreError::BadChoice { reason: format!("row {} has no key", i + 1) })?;
        if !seen.insert(v.clone()) {
            return Err(StoreError::BadChoice {
                reason: format!("the key {v:?} appears on more than one row"),
            });
        }
        out.push(v);
    }
    Ok(out)
}

/// Checks that every key is present and distinct, without copying the keys.
pub(crate) fn check_keys(frame: &DataFrame, key: &str) -> Result<()> {
    let s = column(frame, key)?.as_materialized_series();
    if s.dtype() != &DataType::String {
        return Err(StoreError::BadChoice { reason: format!("the key column {key:?} must be text") });
    }
    let ca = s.str()?;
    let mut seen = std::collections::HashSet::with_capacity(ca.len());
    for (i, v) in ca.iter().enumerate() {
        let v = v.ok_or_else(|| StoreError::BadChoice { reason: format!("row {} has no key", i + 1) })?;
        if !seen.insert(v) {
            return Err(StoreError::BadChoice {
                reason: format!("the key {v:?} appears on more than one row"),
            });
        }
    }
    Ok(())
}

/// Picks rows of a column by index (`None` gives a missing value), renaming it.
pub(crate) fn gather(col: &Column, idx: &[Option<usize>], name: &str) -> Result<Column> {
    let s = col.as_materialized_series();
    let name = PlSmallStr::from_str(name);
    let out = match s.dtype() {
        DataType::Int64 => {
            let v: Vec<Option<i64>> = s.i64()?.iter().collect();
            Int64Chunked::from_iter_options(
                name,
                idx.iter().map(|i| i.and_then(|i| v.get(i).copied().flatten())),
            )
            .into_series()
        }
        DataType::Float64 => {
            let v: Vec<Option<f64>> = s.f64()?.iter().collect();
            Float64Chunked::from_iter_options(
                name,
                idx.iter().map(|i| i.and_then(|i| v.get(i).copied().flatten())),
            )
            .into_series()
        }
        DataType::String => {
            let v: Vec<Option<&str>> = s.str()?.iter().collect();
            StringChunked::from_iter_options(
                name,
                idx.iter().map(|i| i.and_then(|i| v.get(i).copied().flatten())),
            )
            .into_series()
        }
        other => {
            return Err(StoreError::Frame(format!("column {:?} has an unsupported type {other}", s.name())));
        }
    };
    Ok(out.into_column())
}

/// A decimal column from optional values; non-finite values become missing.
pub(crate) fn f64_column(name: &str, values: &[Option<f64>]) -> Column {
    Float64Chunked::from_iter_options(
        PlSmallStr::from_str(name),
        values.iter().map(|v| v.filter(|x| x.is_finite())),
    )
    .into_series()
    .into_column()
}

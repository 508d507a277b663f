//! Derived columns computed from structured specs: rates per N, shares, differences, ratios.
//!
//! A result is missing when an input is missing or a denominator is zero; it is never NaN
//! or infinite. The summary says how many rows were left missing and why.

use polars::prelude::DataFrame;
use wardcast_contract::dataset::{Derivation, DerivedColumn};

use crate::error::{Result, StoreError};
use crate::frame::{f64_column, f64_values};

/// What computing a derived column did.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DeriveSummary {
    /// The derived column.
    pub name: String,
    /// Rows with a value.
    pub computed: usize,
    /// Rows left missing because an input was missing.
    pub missing_inputs: usize,
    /// Rows left missing because the denominator was zero (or the result not finite).
    pub zero_denominators: usize,
}

/// Computes one derived column's values from the frame.
pub fn compute(frame: &DataFrame, spec: &DerivedColumn) -> Result<(Vec<Option<f64>>, DeriveSummary)> {
    let bad = |reason: String| StoreError::Derive { name: spec.name.clone(), reason };
    if spec.name.trim().is_empty() {
        return Err(bad("the new column needs a name".into()));
    }
    if let Derivation::RatePer { per, .. } = &spec.derivation
        && !(per.is_finite() && *per > 0.0)
    {
        return Err(bad(format!("the base of a rate must be a positive number, not {per}")));
    }
    let [a, b] = spec.derivation.inputs();
    let read = |name: &str| -> Result<Vec<Option<f64>>> {
        if name == spec.name {
            return Err(bad(format!("it cannot be computed from itself ({name:?})")));
        }
        match f64_values(frame, name) {
            Ok(Some(v)) => Ok(v),
            Ok(None) => Err(bad(format!("column {name:?} holds text, not numbers"))),
            Err(StoreError::UnknownColumn { .. }) => Err(bad(format!("there is no column named {name:?}"))),
            Err(e) => Err(e),
        }
    };
    let xs = read(a)?;
    let ys = read(b)?;
    let mut summary =
        DeriveSummary { name: spec.name.clone(), computed: 0, missing_inputs: 0, zero_denominators: 0 };
    let mut out = Vec::with_capacity(xs.len());
    for (x, y) in xs.iter().zip(&ys) {
        let (Some(x), Some(y)) = (*x, *y) else {
            summary.missing_inputs += 1;
            out.push(None);
            continue;
        };
        let v = match &spec.derivation {
            Derivation::RatePer { per, .. } => (y != 0.0).then(|| x / y * per),
            Derivation::Share { .. } => (y != 0.0).then(|| x / y * 100.0),
            Derivation::Difference { .. } => Some(x - y),
            Derivation::Ratio { .. } => (y != 0.0).then(|| x / y),
        };
        match v.filter(|v| v.is_finite()) {
            Some(v) => {
                summary.computed += 1;
                out.push(Some(v));
            }
            None => {
                summary.zero_denominators += 1;
                out.push(None);
            }
        }
    }
    Ok((out, summary))
}

/// Computes every derived column in order (later ones may use earlier ones), replacing any
/// column of the same name.
pub fn apply_all(frame: &mut DataFrame, specs: &[DerivedColumn]) -> Result<Vec<DeriveSummary>> {
    let mut summaries = Vec::with_capacity(specs.len());
    for spec in specs {
        let (values, summary) = compute(frame, spec)?;
        frame.with_column(f64_column(&spec.name, &values))?;
        summaries.push(summary);
    }
    Ok(summaries)
}

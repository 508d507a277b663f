//! The scenario computations behind the What-if page and its JSON twin: a prediction for one
//! area with changed indicator values, the average over every area with one indicator shifted,
//! and the extrapolation checks (leverage and observed ranges).
//!
//! Every design row goes through the design's own `row_for_prediction`, so the model's
//! transforms and categorical codings apply exactly as in the fit, and every interval comes
//! from `Fit::predict`. A difference between two predictions is predicted from the difference
//! of their design rows, which gives its estimate and its interval in one step.

use std::collections::HashMap;

use wardcast_contract::fit::{Interval, PredictionDoc};
use wardcast_contract::scenario::{
    AllAreasDoc, AverageDoc, DifferenceDoc, ExtrapolationDoc, InputValueDoc, OneAreaDoc, ScenarioDocument,
    ScenarioRequest, ShiftDoc, ShiftOperation, ValueDoc,
};
use wardcast_engine::{ColumnData, Design, Fit, Matrix, Prediction, PredictorValue, Table, TermKind};

use crate::error::{Result, ServerError};
use crate::web::state::Analysis;

/// A leverage counts as beyond the data only when it exceeds the largest in the data by more
/// than rounding noise.
const LEVERAGE_TOLERANCE: f64 = 1e-10;

/// One predictor of the model, as the scenario forms need it.
#[derive(Debug, Clone, PartialEq)]
pub struct PredictorInfo {
    /// The column.
    pub column: String,
    /// The levels of a categorical predictor, reference first; `None` for a numeric one.
    pub levels: Option<Vec<String>>,
    /// The smallest value among the areas in the model (numeric predictors).
    pub min: Option<f64>,
    /// The largest value among the areas in the model (numeric predictors).
    pub max: Option<f64>,
}

/// The model's predictors in model order, with their observed ranges.
pub fn predictors(analysis: &Analysis) -> Vec<PredictorInfo> {
    let design = analysis.fitted().fit().design();
    let table = analysis.table();
    let rows = fitted_rows(table, design);
    design
        .term_kinds()
        .iter()
        .map(|kind| match kind {
            TermKind::Numeric { column, .. } => {
                let values: Vec<f64> = rows
                    .iter()
                    .filter_map(|&i| match cell(table, column, i) {
                        Some(ValueDoc::Number(x)) => Some(x),
                        _ => None,
                    })
                    .collect();
                PredictorInfo {
                    column: column.clone(),
                    levels: None,
                    min: values.iter().copied().reduce(f64::min),
                    max: values.iter().copied().reduce(f64::max),
                }
            }
            TermKind::Categorical { column, reference, levels } => PredictorInfo {
                column: column.clone(),
                levels: Some(std::iter::once(reference.clone()).chain(levels.iter().cloned()).collect()),
                min: None,
                max: None,
            },
        })
        .collect()
}

/// The table rows of the areas in the model, in design order.
fn fitted_rows(table: &Table, design: &Design) -> Vec<usize> {
    let index: HashMap<&str, usize> = table.keys().iter().enumerate().map(|(i, k)| (k.as_str(), i)).collect();
    design.keys().iter().filter_map(|k| index.get(k.as_str()).copied()).collect()
}

/// One cell of the table as a predictor value; `None` when missing or not a finite number.
pub fn cell(table: &Table, column: &str, row: usize) -> Option<ValueDoc> {
    match &table.column(column)?.data {
        ColumnData::Numeric(v) => {
            v.get(row).copied().flatten().filter(|x| x.is_finite()).map(ValueDoc::Number)
        }
        ColumnData::Text(v) => v.get(row).cloned().flatten().map(ValueDoc::Level),
    }
}

/// The table row of an area.
pub fn area_index(table: &Table, key: &str) -> Option<usize> {
    table.keys().iter().position(|k| k == key)
}

/// The areas whose every predictor has a value, so a scenario can start from them, in table
/// order, each with whether the model used it.
pub fn complete_areas(analysis: &Analysis) -> Vec<(String, bool)> {
    let table = analysis.table();
    let design = analysis.fitted().fit().design();
    let used: std::collections::HashSet<&str> = design.keys().iter().map(String::as_str).collect();
    let columns: Vec<String> = predictors(analysis).into_iter().map(|p| p.column).collect();
    table
        .keys()
        .iter()
        .enumerate()
        .filter(|(i, _)| columns.iter().all(|c| cell(table, c, *i).is_some()))
        .map(|(_, k)| (k.clone(), used.contains(k.as_str())))
        .collect()
}

/// An area's value of every predictor, in model order.
///
/// # Errors
/// Not found for an unknown area; a bad request when the area lacks a predictor's value.
pub fn area_values(analysis: &Analysis, key: &str) -> Result<Vec<(String, ValueDoc)>> {
    let table = analysis.table();
    let row = area_index(table, key).ok_or_else(|| {
        ServerError::BadRequest(format!("There is no area {key:?} in this analysis' table."))
    })?;
    predictors(analysis)
        .into_iter()
        .map(|p| {
            cell(table, &p.column, row).map(|v| (p.column.clone(), v)).ok_or_else(|| {
                ServerError::BadRequest(format!(
                    "Area {key:?} has no value for {}, so a scenario cannot start from it; give every value \
                     instead.",
                    p.column
                ))
            })
        })
        .collect()
}

/// Checks a value given for a predictor and puts it in the predictor's kind.
fn coerce(p: &PredictorInfo, value: &ValueDoc) -> Result<ValueDoc> {
    match (&p.levels, value) {
        (None, ValueDoc::Number(x)) if x.is_finite() => Ok(ValueDoc::Number(*x)),
        (None, ValueDoc::Number(_)) => {
            Err(ServerError::BadRequest(format!("The value for {} must be a finite number.", p.column)))
        }
        (None, ValueDoc::Level(text)) => match text.trim().parse::<f64>() {
            Ok(x) if x.is_finite() => Ok(ValueDoc::Number(x)),
            _ => Err(ServerError::BadRequest(format!(
                "The value for {} must be a number; {text:?} is not one.",
                p.column
            ))),
        },
        (Some(levels), value) => {
            let level = match value {
                ValueDoc::Level(l) => l.clone(),
                ValueDoc::Number(x) => x.to_string(),
            };
            if levels.contains(&level) {
                Ok(ValueDoc::Level(level))
            } else {
                Err(ServerError::BadRequest(format!(
                    "{} has no level {level:?}; the model knows {}.",
                    p.column,
                    levels.join(", ")
                )))
            }
        }
    }
}

fn to_engine(values: &[(String, ValueDoc)]) -> Vec<(String, PredictorValue)> {
    values
        .iter()
        .map(|(c, v)| {
            let v = match v {
                ValueDoc::Number(x) => PredictorValue::Number(*x),
                ValueDoc::Level(l) => PredictorValue::Level(l.clone()),
            };
            (c.clone(), v)
        })
        .collect()
}

/// One prediction from one design row.
fn predict_row(fit: &Fit, row: &[f64], level: f64) -> Result<Prediction> {
    fit.predict(&Matrix::from_rows(&[row.to_vec()]), None, level)?
        .into_iter()
        .next()
        .ok_or_else(|| ServerError::Internal("the engine returned no prediction for one row".into()))
}

fn difference(fit: &Fit, new: &[f64], old: &[f64], level: f64) -> Result<DifferenceDoc> {
    let d: Vec<f64> = new.iter().zip(old).map(|(a, b)| a - b).collect();
    let p = predict_row(fit, &d, level)?;
    Ok(DifferenceDoc {
        estimate: p.fit,
        std_error: p.se_mean,
        interval: Interval { level, low: p.mean_ci.0, high: p.mean_ci.1 },
    })
}

/// The largest `xᵢᵀ(XᵀWX)⁻¹xᵢ` over the design rows.
fn max_data_leverage(fit: &Fit) -> f64 {
    let x = fit.design().x();
    (0..x.nrows()).map(|i| fit.qr().hat_quadratic(&x.row(i))).fold(0.0, f64::max)
}

fn beyond(h: f64, max: f64) -> bool {
    h > max + LEVERAGE_TOLERANCE * max.abs().max(1.0)
}

fn outside(p: &PredictorInfo, x: f64) -> bool {
    matches!((p.min, p.max), (Some(lo), Some(hi)) if x < lo || x > hi)
}

/// The scale every prediction is on, in words.
pub fn response_scale(analysis: &Analysis) -> String {
    let spec = analysis.spec();
    let info = analysis.glossary().column(&spec.response);
    let unit = info.unit.as_deref().map(str::trim).filter(|u| !u.is_empty());
    match spec.response_transform {
        None => match unit {
            Some(u) => format!("{} ({u})", info.label),
            None => info.label.clone(),
        },
        Some(t) => format!(
            "{} of {}: the model was fitted on that scale and the engine gives its intervals on it, so the \
             predictions are not converted back to {}",
            crate::web::words::transform_phrase(t),
            info.label,
            unit.unwrap_or("the original units")
        ),
    }
}

/// Computes the scenarios a request asks for. Cheap, but call it from `blocking` with the
/// rest of the numerics.
///
/// # Errors
/// A bad request for an unknown area or column, a value of the wrong kind, a shift of a
/// categorical predictor or an empty request; engine errors (e.g. a value outside a
/// transform's domain) as they come.
pub fn compute(analysis: &Analysis, request: &ScenarioRequest) -> Result<ScenarioDocument> {
    let spec = analysis.spec();
    let level = spec.level;
    let fit = analysis.fitted().fit();
    let design = fit.design();
    let preds = predictors(analysis);
    let max_h = max_data_leverage(fit);
    let mut doc = ScenarioDocument::new(spec.response.clone(), response_scale(analysis), level);
    doc.notes.push(
        "A point's leverage is x*ᵀ(XᵀWX)⁻¹x*; a prediction is flagged as beyond the data when it exceeds the \
         largest value of the same quantity among the areas in the model, and each value outside the range \
         observed among those areas is named."
            .to_owned(),
    );
    if spec.weights.is_some() {
        doc.notes.push(
            "The model is weighted; a single area's prediction interval assumes a weight of 1 for that area."
                .to_owned(),
        );
    }
    if request.area.is_none() && request.values.is_empty() && request.shift.is_none() {
        return Err(ServerError::BadRequest(
            "Name an area, give indicator values, or give a shift for every area: there is nothing to predict."
                .into(),
        ));
    }
    for column in request.values.keys() {
        if !preds.iter().any(|p| &p.column == column) {
            return Err(ServerError::BadRequest(format!("{column} is not a predictor in the model.")));
        }
    }

    if request.area.is_some() || !request.values.is_empty() {
        let base = match &request.area {
            Some(key) => Some(area_values(analysis, key)?),
            None => None,
        };
        let mut inputs = Vec::with_capacity(preds.len());
        let mut used = Vec::with_capacity(preds.len());
        for (i, p) in preds.iter().enumerate() {
            let area_value = base.as_ref().map(|b| b[i].1.clone());
            let value = match (request.values.get(&p.column), &area_value) {
                (Some(v), _) => coerce(p, v)?,
                (None, Some(v)) => v.clone(),
                (None, None) => {
                    return Err(ServerError::BadRequest(format!(
                        "Give a value for {} or name an area to start from.",
                        p.column
                    )));
                }
            };
            let out = match value {
                ValueDoc::Number(x) => outside(p, x),
                ValueDoc::Level(_) => false,
            };
            inputs.push(InputValueDoc {
                column: p.column.clone(),
                changed: area_value.as_ref().is_some_and(|a| a != &value),
                value: value.clone(),
                area_value,
                observed_min: p.min,
                observed_max: p.max,
                outside_observed_range: out,
            });
            used.push((p.column.clone(), value));
        }
        let row = design.row_for_prediction(&to_engine(&used))?;
        let prediction = predict_row(fit, &row, level)?;
        let label = request.area.clone().map_or_else(|| "scenario".to_owned(), |a| format!("{a} (scenario)"));
        let h = fit.qr().hat_quadratic(&row);
        let extrapolation = ExtrapolationDoc {
            leverage: h,
            max_data_leverage: max_h,
            beyond_data: beyond(h, max_h),
            columns_outside_range: inputs
                .iter()
                .filter(|v| v.outside_observed_range)
                .map(|v| v.column.clone())
                .collect(),
        };
        let (current, diff) = match (&request.area, &base) {
            (Some(key), Some(base)) => {
                let base_row = design.row_for_prediction(&to_engine(base))?;
                let now = predict_row(fit, &base_row, level)?;
                (
                    Some(PredictionDoc::new(key.clone(), &now, level)),
                    Some(difference(fit, &row, &base_row, level)?),
                )
            }
            _ => (None, None),
        };
        doc.one_area = Some(OneAreaDoc {
            area: request.area.clone(),
            inputs,
            prediction: PredictionDoc::new(label, &prediction, level),
            current,
            difference: diff,
            extrapolation,
        });
    }

    if let Some(shift) = &request.shift {
        doc.all_areas = Some(all_areas(analysis, fit, &preds, shift, max_h)?);
    }
    Ok(doc)
}

fn all_areas(
    analysis: &Analysis,
    fit: &Fit,
    preds: &[PredictorInfo],
    shift: &ShiftDoc,
    max_h: f64,
) -> Result<AllAreasDoc> {
    let level = analysis.spec().level;
    let design = fit.design();
    let Some(index) = preds.iter().position(|p| p.column == shift.column) else {
        return Err(ServerError::BadRequest(format!("{} is not a predictor in the model.", shift.column)));
    };
    let p = &preds[index];
    if p.levels.is_some() {
        return Err(ServerError::BadRequest(format!(
            "{} is a categorical predictor; only a numeric indicator can be shifted.",
            shift.column
        )));
    }
    if !shift.amount.is_finite() {
        return Err(ServerError::BadRequest("The shift amount must be a finite number.".into()));
    }
    let x = design.x();
    let n = x.nrows();
    let ncols = x.ncols();
    if n == 0 {
        return Err(ServerError::BadRequest("The model has no areas to shift.".into()));
    }
    let mut old_mean = vec![0.0; ncols];
    let mut new_mean = vec![0.0; ncols];
    let mut beyond_data = Vec::new();
    let mut outside_range = Vec::new();
    let mut max_leverage: f64 = 0.0;
    for (i, key) in design.keys().iter().enumerate() {
        let mut values = area_values(analysis, key)?;
        let shifted = match values[index].1 {
            ValueDoc::Number(v) => match shift.operation {
                ShiftOperation::Add => v + shift.amount,
                ShiftOperation::Multiply => v * shift.amount,
            },
            ValueDoc::Level(_) => {
                return Err(ServerError::Internal("a numeric predictor holds text".into()));
            }
        };
        values[index].1 = ValueDoc::Number(shifted);
        let row = design.row_for_prediction(&to_engine(&values)).map_err(|e| {
            ServerError::BadRequest(format!("With this shift, area {key} has no prediction: {e}."))
        })?;
        let h = fit.qr().hat_quadratic(&row);
        max_leverage = max_leverage.max(h);
        if beyond(h, max_h) {
            beyond_data.push(key.clone());
        }
        if outside(p, shifted) {
            outside_range.push(key.clone());
        }
        let old = x.row(i);
        for j in 0..ncols {
            old_mean[j] += old[j] / n as f64;
            new_mean[j] += row[j] / n as f64;
        }
    }
    let average = |row: &[f64]| -> Result<AverageDoc> {
        let p = predict_row(fit, row, level)?;
        Ok(AverageDoc {
            fit: p.fit,
            std_error: p.se_mean,
            interval: Interval { level, low: p.mean_ci.0, high: p.mean_ci.1 },
        })
    };
    Ok(AllAreasDoc {
        shift: shift.clone(),
        areas: n,
        current: average(&old_mean)?,
        scenario: average(&new_mean)?,
        difference: difference(fit, &new_mean, &old_mean, level)?,
        max_leverage,
        max_data_leverage: max_h,
        beyond_data,
        outside_range,
    })
}

//! The areas document: every area used in the fit, observed against predicted, with its
//! studentized deleted residual and its leave-one-out prediction interval.
//!
//! The interval of area i is the prediction interval of a model fitted without it:
//! centre `ŷ₍ᵢ₎ = yᵢ − eᵢ/(1 − hᵢ)`, half-width `t(1 − α/2, n − p − 1)·s₍ᵢ₎/√(wᵢ(1 − hᵢ))`
//! (weights `wᵢ = 1` without weights). The observed value lies outside it exactly when
//! `|tᵢ| > t(1 − α/2, n − p − 1)`, which is the flag. Formulas and sources: `docs/METHODS.md`.

use serde::{Deserialize, Serialize};
use wardcast_engine::areas::DeletedIntervals;

use crate::SCHEMA_VERSION;
use crate::numbers::Number;

/// One area.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AreaRow {
    /// The area's key.
    pub key: String,
    /// The area's name, when the table has a name column.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub name: Option<String>,
    /// The observed response (on the model's scale).
    pub observed: f64,
    /// The model's prediction.
    pub predicted: f64,
    /// `observed − predicted`.
    pub residual: f64,
    /// The studentized deleted residual `tᵢ`; null where undefined.
    pub studentized_deleted: Number,
    /// The leverage `hᵢ`.
    pub leverage: f64,
    /// The case weight (1 without weights).
    pub weight: f64,
    /// The leave-one-out prediction `ŷ₍ᵢ₎`; null where the leverage is 1.
    pub loo_prediction: Number,
    /// The interval's lower end; null where undefined.
    pub low: Number,
    /// The interval's upper end; null where undefined.
    pub high: Number,
    /// `higher` or `lower` (than the indicators predict, outside the interval), `within`, or
    /// `undefined`.
    pub flag: String,
}

/// Observed against expected for every area of a fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AreasDocument {
    /// Schema version.
    pub schema_version: String,
    /// Always `areas`.
    pub kind: String,
    /// The analysis id.
    pub analysis: String,
    /// The response as the model uses it, e.g. `assault_rate_per_10k` or `log(…)`.
    pub response: String,
    /// The interval level, 0.95.
    pub level: f64,
    /// Areas in the fit.
    pub n: usize,
    /// Coefficients in the model.
    pub parameters: usize,
    /// Degrees of freedom of each leave-one-out fit, `n − p − 1`.
    pub df: usize,
    /// `t(1 − α/2, n − p − 1)`, the flag threshold for `|tᵢ|`; null when `df < 1`.
    pub t_critical: Number,
    /// Whether the fit is weighted.
    pub weighted: bool,
    /// Areas flagged (outside their interval).
    pub flagged: usize,
    /// Areas expected to flag by chance alone when the model is right: `(1 − level)·n`.
    pub expected_by_chance: f64,
    /// The table column the names come from, when there is one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub name_column: Option<String>,
    /// One row per area, in the order asked for (the fit's row order by default).
    pub rows: Vec<AreaRow>,
}

impl AreasDocument {
    /// The document of the engine's intervals; `names[i]` names row i when given.
    pub fn new(
        analysis: &str,
        response: &str,
        parameters: usize,
        intervals: &DeletedIntervals,
        name_column: Option<(&str, &[Option<String>])>,
    ) -> Self {
        let rows: Vec<AreaRow> = intervals
            .rows
            .iter()
            .enumerate()
            .map(|(i, r)| {
                let flag = match (intervals.outside(i), r.residual > 0.0) {
                    (Some(true), true) => "higher",
                    (Some(true), false) => "lower",
                    (Some(false), _) => "within",
                    (None, _) => "undefined",
                };
                AreaRow {
                    key: r.key.clone(),
                    name: name_column.and_then(|(_, names)| names.get(i).cloned().flatten()),
                    observed: r.observed,
                    predicted: r.predicted,
                    residual: r.residual,
                    studentized_deleted: Number::from_opt(r.studentized_deleted),
                    leverage: r.leverage,
                    weight: r.weight,
                    loo_prediction: Number::from_opt(r.deleted_prediction),
                    low: Number::from_opt(r.low()),
                    high: Number::from_opt(r.high()),
                    flag: flag.to_owned(),
                }
            })
            .collect();
        let n = rows.len();
        AreasDocument {
            schema_version: SCHEMA_VERSION.to_owned(),
            kind: "areas".to_owned(),
            analysis: analysis.to_owned(),
            response: response.to_owned(),
            level: intervals.level,
            n,
            parameters,
            df: intervals.df,
            t_critical: Number::from_opt(intervals.t_critical),
            weighted: intervals.weighted,
            flagged: rows.iter().filter(|r| r.flag == "higher" || r.flag == "lower").count(),
            // Rounded to nine decimals so 0.05 · 62 reads 3.1, not 3.1000000000000028.
            expected_by_chance: ((1.0 - intervals.level) * n as f64 * 1e9).round() / 1e9,
            name_column: name_column.map(|(c, _)| c.to_owned()),
            rows,
        }
    }
}

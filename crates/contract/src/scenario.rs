//! Scenario documents: predictions for areas whose indicators differ from the data (one area
//! with changed values, or every area shifted by a stated amount), with their intervals and
//! an extrapolation flag, and the request an allocation scenario is made from.
//!
//! A scenario is a prediction for areas that differ in the stated way. It is not an estimate
//! of what would happen if an indicator were changed, and the documents never say so.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::allocation::BlendWeightsDoc;
use crate::cautions::{Caution, standing_cautions};
use crate::fit::{Interval, PredictionDoc};

/// The plain-language framing written into every scenario document.
pub const SCENARIO_FRAMING: &str = "These are the model's predictions for areas that differ in the stated way \
from the areas in the data. They describe how the outcome differs between areas with different indicator values; \
they are not estimates of what changing an indicator would do, because the model compares areas and does not \
follow any area through a change.";

/// A value given for a predictor: a number for a numeric predictor, a level for a text one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum ValueDoc {
    /// A number on the raw scale of the column (a transform in the model is applied to it).
    Number(f64),
    /// A level of a categorical predictor.
    Level(String),
}

/// How a shift changes an indicator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ShiftOperation {
    /// Adds the amount to every area's value.
    Add,
    /// Multiplies every area's value by the amount.
    Multiply,
}

impl ShiftOperation {
    /// The stable name: `add` or `multiply`.
    pub fn name(self) -> &'static str {
        match self {
            ShiftOperation::Add => "add",
            ShiftOperation::Multiply => "multiply",
        }
    }
}

/// A change applied to one numeric indicator of every area.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ShiftDoc {
    /// The indicator column.
    pub column: String,
    /// Add or multiply.
    pub operation: ShiftOperation,
    /// The amount added, or the factor.
    pub amount: f64,
}

/// What a scenario request asks for. At least one of `area`, `values` and `shift` is needed.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioRequest {
    /// The area whose indicator values the one-area scenario starts from; its own prediction is
    /// reported beside the scenario's. Without it, `values` must give every predictor.
    #[serde(default)]
    pub area: Option<String>,
    /// Predictor values that replace the area's, by column.
    #[serde(default)]
    pub values: BTreeMap<String, ValueDoc>,
    /// A change applied to every area in the model, for the all-areas scenario.
    #[serde(default)]
    pub shift: Option<ShiftDoc>,
}

/// One predictor's value in the one-area scenario.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InputValueDoc {
    /// The predictor column.
    pub column: String,
    /// The value used.
    pub value: ValueDoc,
    /// The area's own value; null without an area.
    pub area_value: Option<ValueDoc>,
    /// Whether the value differs from the area's own.
    pub changed: bool,
    /// The smallest value among the areas in the model (numeric predictors only).
    pub observed_min: Option<f64>,
    /// The largest value among the areas in the model (numeric predictors only).
    pub observed_max: Option<f64>,
    /// Whether the value lies outside `[observed_min, observed_max]`.
    pub outside_observed_range: bool,
}

/// Whether a new point lies beyond the data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ExtrapolationDoc {
    /// The new point's leverage `h* = x*ᵀ(XᵀWX)⁻¹x*`.
    pub leverage: f64,
    /// The largest `xᵢᵀ(XᵀWX)⁻¹xᵢ` over the areas in the model (their leverages when unweighted).
    pub max_data_leverage: f64,
    /// Whether `leverage` exceeds `max_data_leverage`: the prediction extrapolates.
    pub beyond_data: bool,
    /// The predictors whose value lies outside the range observed in the model's areas.
    pub columns_outside_range: Vec<String>,
}

/// A difference between two predictions for the same area, with its interval. It carries the
/// uncertainty of the coefficients only: both predictions describe the same area.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DifferenceDoc {
    /// The scenario's prediction minus the current one.
    pub estimate: f64,
    /// Its standard error.
    pub std_error: f64,
    /// Its confidence interval.
    pub interval: Interval,
}

/// The one-area scenario.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OneAreaDoc {
    /// The area the values start from; null when every value was given.
    pub area: Option<String>,
    /// Every predictor's value, in model order.
    pub inputs: Vec<InputValueDoc>,
    /// The prediction at the scenario's values: the mean's confidence interval and a single
    /// area's prediction interval.
    pub prediction: PredictionDoc,
    /// The prediction at the area's own values; null without an area.
    pub current: Option<PredictionDoc>,
    /// Scenario minus current, with its interval; null without an area.
    pub difference: Option<DifferenceDoc>,
    /// Whether the scenario's point lies beyond the data.
    pub extrapolation: ExtrapolationDoc,
}

/// The predicted average over the areas in the model, with its confidence interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct AverageDoc {
    /// The average of the areas' predictions.
    pub fit: f64,
    /// Its standard error.
    pub std_error: f64,
    /// Its confidence interval.
    pub interval: Interval,
}

/// The all-areas scenario: every area in the model with one indicator shifted.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AllAreasDoc {
    /// The shift.
    pub shift: ShiftDoc,
    /// The number of areas averaged (the areas in the model).
    pub areas: usize,
    /// The average prediction at the areas' own values.
    pub current: AverageDoc,
    /// The average prediction with the shift.
    pub scenario: AverageDoc,
    /// Scenario minus current, with its interval.
    pub difference: DifferenceDoc,
    /// The largest leverage among the shifted areas.
    pub max_leverage: f64,
    /// The largest `xᵢᵀ(XᵀWX)⁻¹xᵢ` over the areas in the model.
    pub max_data_leverage: f64,
    /// Areas whose shifted point lies beyond the data (leverage above the largest in the data).
    pub beyond_data: Vec<String>,
    /// Areas whose shifted value lies outside the range observed in the model's areas.
    pub outside_range: Vec<String>,
}

/// The scenario document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScenarioDocument {
    /// Schema version.
    pub schema_version: String,
    /// Always `scenario`.
    pub kind: String,
    /// The response column.
    pub response: String,
    /// The scale every prediction is on, in words.
    pub response_scale: String,
    /// The interval level, e.g. 0.95.
    pub level: f64,
    /// The one-area scenario, when asked for.
    pub one_area: Option<OneAreaDoc>,
    /// The all-areas scenario, when asked for.
    pub all_areas: Option<AllAreasDoc>,
    /// Why these are predictions for areas that differ, not effects of a change.
    pub framing: String,
    /// Notes on how the numbers were made.
    pub notes: Vec<String>,
    /// The standing cautions.
    pub cautions: Vec<Caution>,
}

impl ScenarioDocument {
    /// A document with the framing, the cautions and no scenario yet.
    pub fn new(response: impl Into<String>, response_scale: impl Into<String>, level: f64) -> Self {
        ScenarioDocument {
            schema_version: crate::SCHEMA_VERSION.to_owned(),
            kind: "scenario".to_owned(),
            response: response.into(),
            response_scale: response_scale.into(),
            level,
            one_area: None,
            all_areas: None,
            framing: SCENARIO_FRAMING.to_owned(),
            notes: Vec::new(),
            cautions: standing_cautions(),
        }
    }
}

impl ScenarioRequest {
    /// The settings a scenario document was computed from: the one-area scenario's area and
    /// the values that differ from the area's own (every value when no area was named), and
    /// the all-areas scenario's shift. Computing the returned request on the same analysis
    /// gives the same document again.
    pub fn from_document(doc: &ScenarioDocument) -> ScenarioRequest {
        let mut request = ScenarioRequest::default();
        if let Some(one) = &doc.one_area {
            request.area = one.area.clone();
            request.values = one
                .inputs
                .iter()
                .filter(|i| i.changed || i.area_value.is_none())
                .map(|i| (i.column.clone(), i.value.clone()))
                .collect();
        }
        if let Some(all) = &doc.all_areas {
            request.shift = Some(all.shift.clone());
        }
        request
    }
}

/// The what-if settings a saved analysis keeps in its `scenario` field. Only settings are
/// saved, never results: the scenarios are computed again from them whenever the analysis is
/// restored or briefed, so they always match the model as fitted then.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct SavedScenarios {
    /// Extra candidate predictors searched when the brief chooses the model, by column.
    #[serde(default)]
    pub candidates: Vec<String>,
    /// The settings of each scenario kept for the brief, oldest first: a one-area scenario has
    /// `area` and the changed `values`, an all-areas scenario has `shift`.
    #[serde(default)]
    pub kept: Vec<ScenarioRequest>,
}

impl SavedScenarios {
    /// Reads the `scenario` field of a saved analysis; null (an analysis saved before any
    /// scenario was kept) reads as no settings.
    pub fn from_value(value: &serde_json::Value) -> Result<SavedScenarios, serde_json::Error> {
        if value.is_null() {
            return Ok(SavedScenarios::default());
        }
        serde_json::from_value(value.clone())
    }
}

/// What an allocation scenario is made from. Only `total` and `basis` are required; the rest
/// take the defaults the page shows, and the document records the values used.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AllocationRequest {
    /// The amount to allocate, in whole currency units.
    pub total: u64,
    /// A label for the currency, e.g. `$` or `EUR`; recorded in the notes.
    #[serde(default)]
    pub currency: Option<String>,
    /// `population`, `observed`, `expected` or `blend`.
    pub basis: String,
    /// The blend's weights; required when the basis is `blend`.
    #[serde(default)]
    pub blend_weights: Option<BlendWeightsDoc>,
    /// The least amount any area receives.
    #[serde(default)]
    pub floor: Option<u64>,
    /// The most any area receives.
    #[serde(default)]
    pub cap: Option<u64>,
    /// Simulation draws (default 2000).
    #[serde(default)]
    pub draws: Option<usize>,
    /// Simulation seed.
    #[serde(default)]
    pub seed: Option<u64>,
    /// The rate unit of the response, e.g. 10000 for a rate per 10,000 residents.
    #[serde(default)]
    pub rate_unit: Option<f64>,
    /// The column of residents.
    #[serde(default)]
    pub residents_column: Option<String>,
    /// The column of observed incidents.
    #[serde(default)]
    pub incidents_column: Option<String>,
    /// The column of this year's budget; an empty string means none.
    #[serde(default)]
    pub budget_column: Option<String>,
}

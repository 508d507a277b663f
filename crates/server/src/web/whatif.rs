//! The What-if page: predictions for areas whose indicators differ from the data (one area with
//! changed values, or every area shifted), extrapolation flags, and allocation scenarios.
//!
//! | Route                                          | What                                        |
//! |------------------------------------------------|---------------------------------------------|
//! | `GET /analyses/{id}/what-if`                   | the page; scenario settings as query fields |
//! | `POST /analyses/{id}/what-if/allocate`         | runs an allocation, 303 back to the page    |
//! | `POST /api/analyses/{id}/what-if/predict`      | scenario document (JSON)                    |
//! | `POST /api/analyses/{id}/what-if/allocate`     | allocation document (JSON), also stored     |
//! | `GET /api/analyses/{id}/what-if/allocation`    | the latest allocation document              |
//! | `POST /analyses/{id}/what-if/keep`             | keeps a scenario for the brief, 303 back    |
//! | `POST /analyses/{id}/what-if/forget`           | removes a kept scenario, 303 back           |
//! | `POST /api/analyses/{id}/what-if/keep`         | keeps a scenario (JSON), 201 with the list  |
//! | `GET /api/analyses/{id}/what-if/kept`          | the kept scenario documents                 |
//!
//! Computing a prediction changes nothing, so the scenario forms are GET forms and every result
//! has a stable address. An allocation is stored on the analysis for the brief, so it is a POST,
//! and so is keeping a scenario for the brief: the kept scenario is recomputed on the server from
//! its settings, never taken from posted numbers.

pub mod allocation;
pub mod scenario;

use std::collections::BTreeMap;

use askama::Template;
use axum::Json;
use axum::Router;
use axum::body::Body;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Path, Query, Request, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use wardcast_contract::allocation::{AllocationDocument, BlendWeightsDoc};
use wardcast_contract::fit::PredictionDoc;
use wardcast_contract::scenario::{
    AllocationRequest, AverageDoc, DifferenceDoc, OneAreaDoc, ScenarioDocument, ScenarioRequest, ShiftDoc,
    ShiftOperation, ValueDoc,
};
use wardcast_report::brief::ScenarioView as BriefScenario;
use wardcast_report::brief::text::{NEGATIVE_PREDICTION, any_negative};
use wardcast_report::svg::text::group_digits;
use wardcast_report::svg::{Axis, Chart, EffectPlot, EffectRow as PlotRow};

use super::forms::{self, FormReading};
use super::pages::{Layout, Section, render};
use super::state::{Analysis, KEPT_SCENARIOS_MAX};
use super::words::{fmt_level, fmt_num, fmt_plain, in_sentence};
use super::{Ctx, blocking, read_body, see_other_to};
use crate::error::{ApiError, Result, ServerError};

/// The largest JSON body accepted by the scenario and allocation routes.
const JSON_LIMIT: usize = 64 * 1024;

/// The routes of this page.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
        .route("/analyses/{id}/what-if", get(page))
        .route("/analyses/{id}/what-if/allocate", post(allocate_form))
        .route("/api/analyses/{id}/what-if/predict", post(predict_json))
        .route("/api/analyses/{id}/what-if/allocate", post(allocate_json))
        .route("/api/analyses/{id}/what-if/allocation", get(latest_allocation))
        .route("/analyses/{id}/what-if/keep", post(keep_form))
        .route("/analyses/{id}/what-if/forget", post(forget_form))
        .route("/api/analyses/{id}/what-if/keep", post(keep_json))
        .route("/api/analyses/{id}/what-if/kept", get(kept_json))
}

/// A number as shown (rounded) and as computed (full precision, for `data-value`).
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// The rounded text.
    pub text: String,
    /// The value with full precision, or empty when undefined.
    pub raw: String,
}

impl Figure {
    fn new(x: f64) -> Self {
        Figure { text: fmt_num(x), raw: if x.is_finite() { format!("{x:?}") } else { String::new() } }
    }

    /// A share (a fraction of 1) shown as a percentage with two decimals.
    fn share(x: f64) -> Self {
        Figure {
            text: if x.is_finite() { format!("{:.2}%", 100.0 * x) } else { "undefined".into() },
            raw: if x.is_finite() { format!("{x:?}") } else { String::new() },
        }
    }

    /// A count: a whole number with thousands separators, or three significant digits when it
    /// is not whole.
    fn count(x: f64) -> Self {
        if x.is_finite() && x.fract() == 0.0 && x.abs() < 1e15 {
            Figure { text: group_signed(x as i64), raw: format!("{x:?}") }
        } else {
            Figure::new(x)
        }
    }

    /// Percentage points with two decimals.
    fn points(x: f64) -> Self {
        Figure {
            text: if x.is_finite() { format!("{x:.2}") } else { "undefined".into() },
            raw: if x.is_finite() { format!("{x:?}") } else { String::new() },
        }
    }

    /// A whole amount with thousands separators.
    fn amount(x: u64) -> Self {
        Figure { text: group_digits(&x.to_string()), raw: x.to_string() }
    }

    /// A signed whole amount with thousands separators and a plain minus.
    fn signed(x: i64) -> Self {
        let digits = group_digits(&x.unsigned_abs().to_string());
        Figure { text: if x < 0 { format!("−{digits}") } else { format!("+{digits}") }, raw: x.to_string() }
    }
}

fn group_signed(x: i64) -> String {
    let digits = group_digits(&x.unsigned_abs().to_string());
    if x < 0 { format!("−{digits}") } else { digits }
}

/// A choice in a select.
#[derive(Debug, Clone)]
pub struct Choice {
    /// The submitted value (user data; escaped on output).
    pub value: String,
    /// What the option says.
    pub label: String,
    /// Whether it is selected.
    pub selected: bool,
}

/// One predictor's field in the one-area form.
#[derive(Debug, Clone)]
pub struct InputField {
    /// The query field name, `x.<column>`.
    pub name: String,
    /// The column.
    pub column: String,
    /// The label from the glossary.
    pub label: String,
    /// The unit, or empty.
    pub unit: String,
    /// The value in the field.
    pub value: String,
    /// Levels for a categorical predictor (a select); empty for a numeric one (a text field).
    pub levels: Vec<Choice>,
    /// The range observed among the areas in the model, in words.
    pub range: String,
}

/// One row of the one-area result table.
#[derive(Debug, Clone)]
pub struct InputRow {
    /// The column's label.
    pub label: String,
    /// The area's own value.
    pub area_value: String,
    /// The scenario's value.
    pub value: String,
    /// Whether the value was changed.
    pub changed: bool,
    /// Whether the value lies outside the observed range.
    pub outside: bool,
}

/// A prediction with both intervals.
#[derive(Debug, Clone)]
pub struct PredictionView {
    /// What it is.
    pub label: String,
    /// The predicted value.
    pub fit: Figure,
    /// Confidence interval of the mean.
    pub mean_low: Figure,
    /// Upper end.
    pub mean_high: Figure,
    /// Prediction interval of a single area.
    pub new_low: Figure,
    /// Upper end.
    pub new_high: Figure,
}

impl PredictionView {
    fn new(label: impl Into<String>, p: &PredictionDoc) -> Self {
        PredictionView {
            label: label.into(),
            fit: Figure::new(p.fit),
            mean_low: Figure::new(p.mean_interval.low),
            mean_high: Figure::new(p.mean_interval.high),
            new_low: Figure::new(p.new_area_interval.low),
            new_high: Figure::new(p.new_area_interval.high),
        }
    }
}

/// An estimate with its confidence interval.
#[derive(Debug, Clone)]
pub struct EstimateView {
    /// The estimate.
    pub value: Figure,
    /// Lower end.
    pub low: Figure,
    /// Upper end.
    pub high: Figure,
}

impl EstimateView {
    fn difference(d: &DifferenceDoc) -> Self {
        EstimateView {
            value: Figure::new(d.estimate),
            low: Figure::new(d.interval.low),
            high: Figure::new(d.interval.high),
        }
    }

    fn average(a: &AverageDoc) -> Self {
        EstimateView {
            value: Figure::new(a.fit),
            low: Figure::new(a.interval.low),
            high: Figure::new(a.interval.high),
        }
    }
}

/// The one-area result.
#[derive(Debug, Clone)]
pub struct OneAreaView {
    /// The area (user data).
    pub area: String,
    /// Each predictor: the area's value and the scenario's.
    pub rows: Vec<InputRow>,
    /// The scenario's prediction.
    pub scenario: PredictionView,
    /// The area's current prediction.
    pub current: Option<PredictionView>,
    /// Scenario minus current.
    pub difference: Option<EstimateView>,
    /// The extrapolation warning, empty when the point lies within the data.
    pub warning: String,
    /// The scenario point's leverage.
    pub leverage: Figure,
    /// The largest leverage in the data.
    pub max_leverage: Figure,
    /// The interval chart.
    pub chart_svg: Option<String>,
    /// Whether a prediction or an interval end is below zero on an untransformed response.
    pub negative: bool,
}

/// The all-areas result.
#[derive(Debug, Clone)]
pub struct AllAreasView {
    /// What was shifted, in words.
    pub description: String,
    /// The number of areas averaged.
    pub areas: usize,
    /// The average at the areas' own values.
    pub current: EstimateView,
    /// The average with the shift.
    pub scenario: EstimateView,
    /// Their difference.
    pub difference: EstimateView,
    /// The extrapolation warning, empty when every shifted point lies within the data.
    pub warning: String,
    /// Whether an average or an interval end is below zero on an untransformed response.
    pub negative: bool,
}

/// One kept scenario in the list on the page.
#[derive(Debug, Clone)]
pub struct KeptRow {
    /// The position in the kept list (the `index` of the remove form).
    pub index: usize,
    /// What differs, in words (user data; escaped on output).
    pub description: String,
    /// What the prediction is for.
    pub predicts: String,
    /// The predicted value.
    pub predicted: Figure,
    /// Confidence interval of the mean, lower end.
    pub mean_low: Figure,
    /// Upper end.
    pub mean_high: Figure,
    /// Prediction interval of a single area, lower end (one-area scenarios).
    pub new_low: Option<Figure>,
    /// Upper end.
    pub new_high: Option<Figure>,
    /// The extrapolation flag in words, empty when within the data.
    pub extrapolation: String,
    /// Whether the scenario lies beyond the data.
    pub beyond: bool,
}

/// The all-areas form's current values.
#[derive(Debug, Clone)]
pub struct ShiftForm {
    /// The numeric predictors to choose from.
    pub columns: Vec<Choice>,
    /// Whether `add` is chosen (else `multiply`).
    pub add: bool,
    /// The amount in the field.
    pub amount: String,
    /// The chosen column (empty when none).
    pub column: String,
}

/// The allocation form's values.
#[derive(Debug, Clone)]
pub struct AllocationForm {
    /// Total.
    pub total: String,
    /// Currency label.
    pub currency: String,
    /// Basis choices.
    pub bases: Vec<Choice>,
    /// Blend weight on population.
    pub w_population: String,
    /// Blend weight on observed incidents.
    pub w_observed: String,
    /// Blend weight on expected incidents.
    pub w_expected: String,
    /// Floor (empty for none).
    pub floor: String,
    /// Cap (empty for none).
    pub cap: String,
    /// Simulation draws.
    pub draws: String,
    /// Simulation seed.
    pub seed: String,
    /// Rate unit.
    pub rate_unit: String,
    /// Residents column choices.
    pub residents: Vec<Choice>,
    /// Incidents column choices.
    pub incidents: Vec<Choice>,
    /// Budget column choices (the first is "none").
    pub budget: Vec<Choice>,
}

/// One area's allocation row.
#[derive(Debug, Clone)]
pub struct AllocationRow {
    /// The area key (user data).
    pub key: String,
    /// Residents.
    pub residents: Figure,
    /// Observed incidents.
    pub observed: Figure,
    /// Model-expected incidents.
    pub expected: Figure,
    /// Share of residents.
    pub share_population: Figure,
    /// Share of observed incidents.
    pub share_observed: Figure,
    /// Share of expected incidents.
    pub share_expected: Figure,
    /// Share under the blend.
    pub share_blend: Option<Figure>,
    /// Range across the pure bases, in points.
    pub range_pp: Figure,
    /// Simulated share, 2.5th percentile.
    pub sim_low: Figure,
    /// Simulated share, 97.5th percentile.
    pub sim_high: Figure,
    /// The proposed amount.
    pub proposed: Figure,
    /// This year's budget.
    pub current: Option<Figure>,
    /// Proposed minus this year's.
    pub change: Option<Figure>,
    /// Whether a floor or cap holds the amount, in words (empty when free).
    pub bound: &'static str,
}

/// A comparison of two bases.
#[derive(Debug, Clone)]
pub struct ComparisonRow {
    /// The two bases in words.
    pub pair: String,
    /// Largest share difference, points.
    pub max_pp: Figure,
    /// Where.
    pub max_key: String,
    /// Mean share difference, points.
    pub mean_pp: Figure,
    /// Money that changes area.
    pub moved: Figure,
}

/// The latest allocation, for display.
#[derive(Debug, Clone)]
pub struct AllocationView {
    /// The settings recorded, as label and value.
    pub settings: Vec<(String, String)>,
    /// The currency label.
    pub currency: String,
    /// Whether the proposal is a blend (adds a column).
    pub blend: bool,
    /// Rows in key order.
    pub rows: Vec<AllocationRow>,
    /// The total.
    pub total: Figure,
    /// The sum of the proposed amounts.
    pub sum: Figure,
    /// Sum of this year's budgets shown.
    pub current_sum: Figure,
    /// The sensitivity in words.
    pub sensitivity: String,
    /// The pairwise comparisons.
    pub comparisons: Vec<ComparisonRow>,
    /// Budget rows that match no allocated area: key and amount.
    pub unmatched: Vec<(String, Figure)>,
    /// The framing.
    pub framing: String,
    /// Notes.
    pub notes: Vec<String>,
    /// The basis the ranges were simulated for.
    pub simulated_basis: String,
}

/// The What-if page.
#[derive(Debug, Template)]
#[template(path = "whatif.html")]
pub struct WhatIfPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id (for links and forms).
    pub id: String,
    /// The plural noun for areas.
    pub areas: String,
    /// The response's label.
    pub response: String,
    /// The scale of every prediction.
    pub scale: String,
    /// The interval level in percent.
    pub level_pct: String,
    /// Areas to start from.
    pub area_choices: Vec<Choice>,
    /// The chosen area.
    pub area: String,
    /// The one-area fields.
    pub fields: Vec<InputField>,
    /// The one-area result.
    pub one: Option<OneAreaView>,
    /// The all-areas form.
    pub shift: ShiftForm,
    /// The all-areas result.
    pub all: Option<AllAreasView>,
    /// Scenario notes.
    pub notes: Vec<String>,
    /// The allocation form.
    pub form: AllocationForm,
    /// The latest allocation.
    pub allocation: Option<AllocationView>,
    /// The scenarios kept for the brief.
    pub kept: Vec<KeptRow>,
    /// Whether a kept scenario has a value below zero on an untransformed response.
    pub kept_negative: bool,
    /// The sentence on predictions below zero.
    pub negative_note: &'static str,
    /// The most scenarios kept.
    pub kept_max: usize,
}

/// The scenario settings read from the page's query.
#[derive(Debug, Default)]
struct PageQuery {
    area: Option<String>,
    values: BTreeMap<String, ValueDoc>,
    shift_column: Option<String>,
    shift_add: bool,
    shift_amount: String,
}

fn parse_query(pairs: Vec<(String, String)>) -> Result<(PageQuery, Option<ShiftDoc>)> {
    let mut q = PageQuery { shift_add: true, ..PageQuery::default() };
    let mut op = None;
    for (name, value) in pairs {
        if let Some(column) = name.strip_prefix("x.") {
            if !value.trim().is_empty() {
                q.values.insert(column.to_owned(), ValueDoc::Level(value));
            }
            continue;
        }
        match name.as_str() {
            "area" if !value.is_empty() => q.area = Some(value),
            "shift_column" if !value.is_empty() => q.shift_column = Some(value),
            "shift_op" => op = Some(value),
            "shift_amount" => q.shift_amount = value,
            _ => {}
        }
    }
    let operation = match op.as_deref() {
        None | Some("add") => ShiftOperation::Add,
        Some("multiply") => ShiftOperation::Multiply,
        Some(other) => {
            return Err(ServerError::BadRequest(format!(
                "{other:?} is not a shift; choose add or multiply."
            )));
        }
    };
    q.shift_add = operation == ShiftOperation::Add;
    let amount = q.shift_amount.trim();
    let shift = if amount.is_empty() {
        None
    } else {
        let amount = parse_f64(amount, "The shift amount")?;
        let column = q
            .shift_column
            .clone()
            .ok_or_else(|| ServerError::BadRequest("Choose the indicator to shift for every area.".into()))?;
        Some(ShiftDoc { column, operation, amount })
    };
    Ok((q, shift))
}

fn parse_f64(text: &str, what: &str) -> Result<f64> {
    match text.trim().parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        _ => Err(ServerError::BadRequest(format!("{what} must be a number; {text:?} is not one."))),
    }
}

fn value_text(v: &ValueDoc) -> String {
    match v {
        ValueDoc::Number(x) => format!("{x}"),
        ValueDoc::Level(l) => l.clone(),
    }
}

fn unit_of(analysis: &Analysis, column: &str) -> String {
    analysis.glossary().column(column).unit.unwrap_or_default()
}

fn one_area_view(analysis: &Analysis, one: &OneAreaDoc, level_pct: &str) -> OneAreaView {
    let glossary = analysis.glossary();
    let area = one.area.clone().unwrap_or_default();
    let rows = one
        .inputs
        .iter()
        .map(|i| InputRow {
            label: glossary.column(&i.column).label,
            area_value: i.area_value.as_ref().map(value_text).unwrap_or_default(),
            value: value_text(&i.value),
            changed: i.changed,
            outside: i.outside_observed_range,
        })
        .collect();
    let x = &one.extrapolation;
    let mut warnings = Vec::new();
    if x.beyond_data {
        warnings.push(format!(
            "This combination of values lies beyond the data: its leverage ({}) exceeds the largest among the {} \
             in the model ({}). The model is extrapolating, and the intervals understate how little the data say \
             about such an area.",
            fmt_num(x.leverage),
            analysis.glossary().areas(),
            fmt_num(x.max_data_leverage)
        ));
    }
    if !x.columns_outside_range.is_empty() {
        let labels: Vec<String> = x.columns_outside_range.iter().map(|c| glossary.column(c).label).collect();
        warnings.push(format!(
            "Outside the range observed among the {} in the model: {}.",
            analysis.glossary().areas(),
            labels.join(", ")
        ));
    }
    let mut values = prediction_values(&one.prediction);
    values.extend(one.current.as_ref().map(prediction_values).unwrap_or_default());
    let negative = linear_response(analysis) && any_negative(values);
    let current = one.current.as_ref().map(|c| PredictionView::new(format!("{area} as it is"), c));
    let scenario = PredictionView::new("With the values above", &one.prediction);
    OneAreaView {
        chart_svg: scenario_chart(analysis, &area, one, level_pct),
        area,
        rows,
        scenario,
        current,
        difference: one.difference.as_ref().map(EstimateView::difference),
        warning: warnings.join(" "),
        leverage: Figure::new(x.leverage),
        max_leverage: Figure::new(x.max_data_leverage),
        negative,
    }
}

/// The prediction and the ends of both its intervals.
fn prediction_values(p: &PredictionDoc) -> Vec<f64> {
    vec![p.fit, p.mean_interval.low, p.mean_interval.high, p.new_area_interval.low, p.new_area_interval.high]
}

/// Whether the response is modelled on its own scale, where a value below zero is impossible for
/// a rate; on a transformed scale (a log) negative values are ordinary.
fn linear_response(analysis: &Analysis) -> bool {
    analysis.spec().response_transform.is_none()
}

/// The two predictions with both intervals on one axis. A chart that cannot be drawn is left
/// out and logged; the table carries every number.
fn scenario_chart(analysis: &Analysis, area: &str, one: &OneAreaDoc, level_pct: &str) -> Option<String> {
    let response = analysis.spec().response.clone();
    let info = analysis.glossary().column(&response);
    let mut rows = Vec::new();
    let mut push = |label: String, p: &PredictionDoc| {
        rows.push(PlotRow {
            label: format!("{label}: mean"),
            estimate: p.fit,
            low: p.mean_interval.low,
            high: p.mean_interval.high,
        });
        rows.push(PlotRow {
            label: format!("{label}: a single area"),
            estimate: p.fit,
            low: p.new_area_interval.low,
            high: p.new_area_interval.high,
        });
    };
    if let Some(c) = &one.current {
        push(format!("{area} as it is"), c);
    }
    push("Scenario".to_owned(), &one.prediction);
    let plot = EffectPlot {
        title: format!("Predicted {}", info.label.to_lowercase()),
        axis: Axis::new(info.label.clone(), info.unit.clone().unwrap_or_default()),
        rows,
        interval_name: format!("{level_pct}% interval"),
        reference: None,
        reference_label: String::new(),
        decimals: None,
        summary:
            "Each prediction is shown twice: with the interval for the mean of areas with these values, and \
                  with the wider interval for a single such area."
                .into(),
    };
    match plot.render() {
        Ok(svg) => Some(svg),
        Err(e) => {
            tracing::warn!(error = %e, "the scenario chart could not be drawn");
            None
        }
    }
}

fn all_areas_view(analysis: &Analysis, doc: &ScenarioDocument) -> Option<AllAreasView> {
    let all = doc.all_areas.as_ref()?;
    let description = shift_description(analysis, &all.shift);
    let mut warnings = Vec::new();
    if !all.beyond_data.is_empty() {
        warnings.push(format!(
            "For {} of the {} {}, the shifted values lie beyond the data (leverage up to {}, against at most {} in \
             the data): {}.",
            all.beyond_data.len(),
            all.areas,
            analysis.glossary().areas(),
            fmt_num(all.max_leverage),
            fmt_num(all.max_data_leverage),
            all.beyond_data.join(", ")
        ));
    }
    if !all.outside_range.is_empty() {
        warnings.push(format!(
            "The shifted value lies outside the observed range for {} of them: {}.",
            all.outside_range.len(),
            all.outside_range.join(", ")
        ));
    }
    Some(AllAreasView {
        description,
        areas: all.areas,
        current: EstimateView::average(&all.current),
        scenario: EstimateView::average(&all.scenario),
        difference: EstimateView::difference(&all.difference),
        warning: warnings.join(" "),
        negative: linear_response(analysis)
            && any_negative([
                all.current.fit,
                all.current.interval.low,
                all.current.interval.high,
                all.scenario.fit,
                all.scenario.interval.low,
                all.scenario.interval.high,
            ]),
    })
}

/// A shift of every area, in words: "Every district with unemployment lower by 1 percentage point".
fn shift_description(analysis: &Analysis, shift: &ShiftDoc) -> String {
    let info = analysis.glossary().column(&shift.column);
    match shift.operation {
        ShiftOperation::Add => {
            let size = shift.amount.abs();
            let unit = match info.unit.as_deref().map(str::trim) {
                Some(u) if u.starts_with('%') && size == 1.0 => " percentage point".to_owned(),
                Some(u) if u.starts_with('%') => " percentage points".to_owned(),
                Some(u) if !u.is_empty() => format!(" {u}"),
                _ => String::new(),
            };
            format!(
                "Every {} with {} {} by {}{unit}",
                analysis.glossary().area(),
                info.label.to_lowercase(),
                if shift.amount < 0.0 { "lower" } else { "higher" },
                fmt_plain(size),
            )
        }
        ShiftOperation::Multiply => format!(
            "Every {} with {} multiplied by {}",
            analysis.glossary().area(),
            info.label.to_lowercase(),
            fmt_plain(shift.amount)
        ),
    }
}

fn choices(values: &[String], selected: &str, labels: impl Fn(&str) -> String) -> Vec<Choice> {
    values.iter().map(|v| Choice { value: v.clone(), label: labels(v), selected: v == selected }).collect()
}

fn allocation_form(analysis: &Analysis, latest: Option<&AllocationDocument>) -> AllocationForm {
    let d = allocation::defaults(analysis);
    let numeric: Vec<String> = analysis.numeric_columns().into_iter().map(str::to_owned).collect();
    let s = latest.map(|doc| &doc.settings);
    let basis = s.map_or(d.basis.clone(), |s| s.basis.clone());
    let weights = s.and_then(|s| s.blend_weights).unwrap_or(BlendWeightsDoc {
        population: 0.5,
        observed: 0.0,
        expected: 0.5,
    });
    let opt = |v: Option<u64>| v.map(|v| v.to_string()).unwrap_or_default();
    let basis_names = ["population", "observed", "expected", "blend"].map(String::from);
    let budget_selected = d.budget_column.clone().unwrap_or_default();
    let mut budget =
        vec![Choice { value: String::new(), label: "none".into(), selected: budget_selected.is_empty() }];
    budget.extend(choices(&numeric, &budget_selected, str::to_owned));
    AllocationForm {
        total: s.map_or(d.total, |s| s.total).to_string(),
        currency: latest.map_or(d.currency.clone().unwrap_or_default(), allocation::currency_of),
        bases: choices(&basis_names, &basis, |b| basis_label(b).to_owned()),
        w_population: weights.population.to_string(),
        w_observed: weights.observed.to_string(),
        w_expected: weights.expected.to_string(),
        floor: opt(s.and_then(|s| s.floor)),
        cap: opt(s.and_then(|s| s.cap)),
        draws: s.map_or(d.draws.unwrap_or_default(), |s| s.draws).to_string(),
        seed: s.map_or(d.seed.unwrap_or_default(), |s| s.seed).to_string(),
        rate_unit: fmt_plain(s.map_or(d.rate_unit.unwrap_or(10_000.0), |s| s.rate_unit)).replace(',', ""),
        residents: choices(&numeric, d.residents_column.as_deref().unwrap_or_default(), str::to_owned),
        incidents: choices(&numeric, d.incidents_column.as_deref().unwrap_or_default(), str::to_owned),
        budget,
    }
}

fn basis_label(name: &str) -> &'static str {
    match name {
        "population" => "residents (population)",
        "observed" => "observed incidents",
        "expected" => "model-expected incidents (predicted rate × residents)",
        "blend" => "a blend of the three, with the weights below",
        _ => "unknown basis",
    }
}

/// The basis as the recorded settings name it.
fn settings_basis(name: &str) -> &'static str {
    if name == "blend" { "a blend of the three bases" } else { basis_label(name) }
}

fn short_basis(name: &str) -> &'static str {
    match name {
        "population" => "residents",
        "observed" => "observed incidents",
        "expected" => "model-expected incidents",
        "blend" => "the blend",
        _ => "an unknown basis",
    }
}

fn allocation_view(doc: &AllocationDocument) -> AllocationView {
    let s = &doc.settings;
    let currency = allocation::currency_of(doc);
    let money = |x: u64| {
        if currency.is_empty() {
            group_digits(&x.to_string())
        } else {
            format!("{currency} {}", group_digits(&x.to_string()))
        }
    };
    let mut settings =
        vec![("Total".to_owned(), money(s.total)), ("Basis".to_owned(), settings_basis(&s.basis).to_owned())];
    if let Some(w) = s.blend_weights {
        settings.push((
            "Blend weights".to_owned(),
            format!("residents {}, observed {}, expected {}", w.population, w.observed, w.expected),
        ));
    }
    settings.push(("Floor per area".to_owned(), s.floor.map_or("none".to_owned(), money)));
    settings.push(("Cap per area".to_owned(), s.cap.map_or("none".to_owned(), money)));
    settings.push(("Rate unit".to_owned(), format!("per {} residents", fmt_plain(s.rate_unit))));
    settings.push(("Simulation".to_owned(), format!("{} draws, seed {}", s.draws, s.seed)));
    let ranges: BTreeMap<&str, _> = doc.uncertainty.districts.iter().map(|r| (r.key.as_str(), r)).collect();
    let rows: Vec<AllocationRow> = doc
        .districts
        .iter()
        .map(|r| {
            let range = ranges.get(r.key.as_str());
            AllocationRow {
                key: r.key.clone(),
                residents: Figure::count(r.residents),
                observed: Figure::count(r.observed),
                expected: Figure::new(r.expected),
                share_population: Figure::share(r.shares.population),
                share_observed: Figure::share(r.shares.observed),
                share_expected: Figure::share(r.shares.expected),
                share_blend: r.shares.blend.map(Figure::share),
                range_pp: Figure::points(r.share_range_pp),
                sim_low: Figure::share(range.map_or(f64::NAN, |u| u.share.p2_5)),
                sim_high: Figure::share(range.map_or(f64::NAN, |u| u.share.p97_5)),
                proposed: Figure::amount(r.proposed),
                current: r.current_budget.map(Figure::amount),
                change: r.change.map(Figure::signed),
                bound: match r.bound.as_str() {
                    "at_floor" => "held at the floor",
                    "at_cap" => "held at the cap",
                    _ => "",
                },
            }
        })
        .collect();
    let sum: u64 = doc.districts.iter().map(|r| r.proposed).sum();
    let current_sum: u64 = doc.districts.iter().filter_map(|r| r.current_budget).sum();
    let sens = &doc.sensitivity;
    let model_pp = doc.uncertainty.max_share_width_pp;
    let verdict = if sens.max_range_pp > model_pp {
        "The choice of basis, not the model, drives most of the difference in money: settle the basis first."
    } else {
        "Here the model's uncertainty moves shares as much as the choice of basis does, so the model's precision \
         matters as much as the basis."
    };
    let sensitivity = format!(
        "Between the three bases, an area's share moves by up to {:.2} percentage points (mean {:.2}). The model's \
         uncertainty gives a 95% simulated range at most {:.2} points wide. {verdict}",
        sens.max_range_pp, sens.mean_range_pp, model_pp
    );
    let comparisons = sens
        .comparisons
        .iter()
        .map(|c| ComparisonRow {
            pair: format!("{} against {}", short_basis(&c.first), short_basis(&c.second)),
            max_pp: Figure::points(c.max_abs_pp),
            max_key: c.max_key.clone(),
            mean_pp: Figure::points(c.mean_abs_pp),
            moved: Figure::amount(c.amount_moved),
        })
        .collect();
    AllocationView {
        settings,
        currency,
        blend: s.blend_weights.is_some(),
        rows,
        total: Figure::amount(s.total),
        sum: Figure::amount(sum),
        current_sum: Figure::amount(current_sum),
        sensitivity,
        comparisons,
        unmatched: doc.unmatched_budgets.iter().map(|b| (b.key.clone(), Figure::amount(b.amount))).collect(),
        framing: doc.framing.clone(),
        notes: doc.notes.clone(),
        simulated_basis: short_basis(&doc.uncertainty.basis).to_owned(),
    }
}

/// `GET /analyses/{id}/what-if`: the page, with the scenarios its query asks for.
pub async fn page(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    query: std::result::Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let Query(pairs) = query
        .map_err(|_| ServerError::BadRequest("The address holds settings that cannot be read.".into()))?;
    let (q, shift) = parse_query(pairs)?;
    let a = analysis.clone();
    let area = q.area.clone().or_else(|| {
        let areas = scenario::complete_areas(&a);
        areas.iter().find(|(_, used)| *used).or(areas.first()).map(|(k, _)| k.clone())
    });
    let request = ScenarioRequest { area: area.clone(), values: q.values.clone(), shift };
    let doc = blocking(move || {
        if request.area.is_none() && request.values.is_empty() && request.shift.is_none() {
            return Ok(None);
        }
        scenario::compute(&a, &request).map(Some)
    })
    .await?;
    let extras = analysis.extras()?;
    let mut page = build_page(&analysis, ctx.shared(), area, &q, doc.as_ref(), extras.allocation.as_ref());
    let kept: Vec<(usize, BriefScenario)> = extras
        .scenarios
        .iter()
        .enumerate()
        .flat_map(|(i, d)| brief_scenarios(&analysis, d).into_iter().map(move |v| (i, v)))
        .collect();
    page.kept_negative =
        linear_response(&analysis) && any_negative(kept.iter().flat_map(|(_, v)| v.values()));
    page.kept = kept.into_iter().map(|(index, v)| kept_row(index, v)).collect();
    Ok(render(&page))
}

fn build_page(
    analysis: &Analysis,
    shared: bool,
    area: Option<String>,
    q: &PageQuery,
    doc: Option<&ScenarioDocument>,
    latest: Option<&AllocationDocument>,
) -> WhatIfPage {
    let glossary = analysis.glossary();
    let spec = analysis.spec();
    let level_pct = fmt_level(spec.level);
    let area = area.unwrap_or_default();
    let one = doc.and_then(|d| d.one_area.as_ref());
    let preds = scenario::predictors(analysis);
    let fields = preds
        .iter()
        .map(|p| {
            let value = one
                .and_then(|o| o.inputs.iter().find(|i| i.column == p.column))
                .map(|i| value_text(&i.value))
                .unwrap_or_default();
            let levels = p.levels.as_ref().map(|ls| choices(ls, &value, str::to_owned)).unwrap_or_default();
            let range = match (p.min, p.max) {
                (Some(lo), Some(hi)) => format!("observed {} to {}", fmt_plain(lo), fmt_plain(hi)),
                _ => String::new(),
            };
            InputField {
                name: format!("x.{}", p.column),
                column: p.column.clone(),
                label: glossary.column(&p.column).label,
                unit: unit_of(analysis, &p.column),
                value,
                levels,
                range,
            }
        })
        .collect();
    let area_choices = scenario::complete_areas(analysis)
        .into_iter()
        .map(|(k, used)| Choice {
            label: if used { k.clone() } else { format!("{k} (not in the model's fit)") },
            selected: k == area,
            value: k,
        })
        .collect();
    let numeric: Vec<String> =
        preds.iter().filter(|p| p.levels.is_none()).map(|p| p.column.clone()).collect();
    let shift_column = q.shift_column.clone().unwrap_or_default();
    let shift = ShiftForm {
        columns: choices(&numeric, &shift_column, |c| glossary.column(c).label),
        add: q.shift_add,
        amount: q.shift_amount.clone(),
        column: shift_column,
    };
    WhatIfPage {
        layout: Layout::analysis(
            format!("What if · {}", analysis.name()),
            shared,
            analysis.id(),
            analysis.name(),
            Section::WhatIf,
        ),
        id: analysis.id().to_owned(),
        areas: glossary.areas().to_owned(),
        response: glossary.column(&spec.response).label,
        scale: scenario::response_scale(analysis),
        one: one.map(|o| one_area_view(analysis, o, &level_pct)),
        all: doc.and_then(|d| all_areas_view(analysis, d)),
        notes: doc.map(|d| d.notes.clone()).unwrap_or_default(),
        level_pct,
        area_choices,
        area,
        fields,
        shift,
        form: allocation_form(analysis, latest),
        allocation: latest.map(allocation_view),
        kept: Vec::new(),
        kept_negative: false,
        negative_note: NEGATIVE_PREDICTION,
        kept_max: KEPT_SCENARIOS_MAX,
    }
}

/// Reads the allocation form into a request, with a plain message for each unreadable field.
fn parse_allocation_form(pairs: Vec<(String, String)>) -> Result<AllocationRequest> {
    let fields: BTreeMap<String, String> = pairs.into_iter().collect();
    let text = |name: &str| fields.get(name).map(|v| v.trim().to_owned()).unwrap_or_default();
    let whole = |name: &str, what: &str| -> Result<Option<u64>> {
        let v = text(name).replace([',', '_', ' '], "");
        if v.is_empty() {
            return Ok(None);
        }
        v.parse::<u64>().map(Some).map_err(|_| {
            ServerError::BadRequest(format!(
                "{what} must be a whole number of currency units, zero or more; {:?} is not one.",
                text(name)
            ))
        })
    };
    let total = whole("total", "The budget total")?
        .ok_or_else(|| ServerError::BadRequest("Give the budget total to allocate.".into()))?;
    let basis = text("basis");
    let weight = |name: &str, what: &str| -> Result<f64> { parse_f64(&text(name), what) };
    let blend_weights = if basis == "blend" {
        Some(BlendWeightsDoc {
            population: weight("w_population", "The blend weight on residents")?,
            observed: weight("w_observed", "The blend weight on observed incidents")?,
            expected: weight("w_expected", "The blend weight on model-expected incidents")?,
        })
    } else {
        None
    };
    let draws = match text("draws") {
        d if d.is_empty() => None,
        d => Some(d.parse::<usize>().map_err(|_| {
            ServerError::BadRequest(format!(
                "The number of simulation draws must be a whole number; {d:?} is not one."
            ))
        })?),
    };
    let seed = match text("seed") {
        s if s.is_empty() => None,
        s => Some(s.parse::<u64>().map_err(|_| {
            ServerError::BadRequest(format!(
                "The simulation seed must be a whole number, zero or more; {s:?} is not one."
            ))
        })?),
    };
    let rate_unit = match text("rate_unit").replace(',', "") {
        r if r.is_empty() => None,
        r => Some(parse_f64(&r, "The rate unit")?),
    };
    let column = |name: &str| fields.get(name).map(|v| v.trim().to_owned());
    Ok(AllocationRequest {
        total,
        currency: Some(text("currency")),
        basis,
        blend_weights,
        floor: whole("floor", "The floor")?,
        cap: whole("cap", "The cap")?,
        draws,
        seed,
        rate_unit,
        residents_column: column("residents_column").filter(|c| !c.is_empty()),
        incidents_column: column("incidents_column").filter(|c| !c.is_empty()),
        budget_column: column("budget_column"),
    })
}

/// Runs an allocation on the blocking pool and stores it on the analysis for the brief.
async fn run_and_store(
    analysis: std::sync::Arc<Analysis>,
    request: AllocationRequest,
) -> Result<AllocationDocument> {
    let a = analysis.clone();
    let doc = blocking(move || allocation::run(&a, &request)).await?;
    analysis.update_extras(|e| e.allocation = Some(doc.clone()))?;
    Ok(doc)
}

/// `POST /analyses/{id}/what-if/allocate`: runs the allocation in the form, stores it, and
/// leads back to the page.
pub async fn allocate_form(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    request: Request,
) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let pairs = forms::read(request, FormReading::plain("The allocation form could not be read.")).await?;
    let request = parse_allocation_form(pairs)?;
    run_and_store(analysis.clone(), request).await?;
    Ok(see_other_to(&format!("/analyses/{}/what-if?allocation=latest#allocation", analysis.id())))
}

async fn json_body<T: serde::de::DeserializeOwned>(body: Body, what: &str) -> Result<T> {
    let bytes = read_body(body, JSON_LIMIT).await?;
    serde_json::from_slice(&bytes)
        .map_err(|e| ServerError::BadRequest(format!("The {what} is not valid: {e}.")))
}

/// `POST /api/analyses/{id}/what-if/predict`: the scenario document for a [`ScenarioRequest`].
pub async fn predict_json(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    body: Body,
) -> std::result::Result<Json<ScenarioDocument>, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let request: ScenarioRequest = json_body(body, "scenario request").await?;
    let doc = blocking(move || scenario::compute(&analysis, &request)).await?;
    Ok(Json(doc))
}

/// `POST /api/analyses/{id}/what-if/allocate`: the allocation document for an
/// [`AllocationRequest`], stored on the analysis as its latest allocation.
pub async fn allocate_json(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    body: Body,
) -> std::result::Result<Json<AllocationDocument>, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let request: AllocationRequest = json_body(body, "allocation request").await?;
    Ok(Json(run_and_store(analysis, request).await?))
}

/// `GET /api/analyses/{id}/what-if/allocation`: the latest allocation document.
pub async fn latest_allocation(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
) -> std::result::Result<Json<AllocationDocument>, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let doc = analysis.extras()?.allocation.ok_or_else(|| {
        ServerError::NotFound(format!("No allocation has been run on the analysis {id:?} yet."))
    })?;
    Ok(Json(doc))
}

/// A scenario document as the brief shows it: one row for the one-area scenario and one for the
/// all-areas scenario, whichever the document holds, with the numbers copied unchanged.
pub fn brief_scenarios(analysis: &Analysis, doc: &ScenarioDocument) -> Vec<BriefScenario> {
    let glossary = analysis.glossary();
    let areas = glossary.areas();
    let mut out = Vec::new();
    if let Some(one) = &doc.one_area {
        let changed: Vec<String> = one
            .inputs
            .iter()
            .filter(|i| i.changed || i.area_value.is_none())
            .map(|i| {
                let label = in_sentence(&glossary.column(&i.column).label);
                match &i.area_value {
                    Some(a) => format!("{label} {} instead of {}", value_text(&i.value), value_text(a)),
                    None => format!("{label} {}", value_text(&i.value)),
                }
            })
            .collect();
        let description = match (&one.area, changed.is_empty()) {
            (Some(area), true) => format!("{area} as it is"),
            (Some(area), false) => format!("{area} with {}", changed.join(", ")),
            (None, _) => format!("A {} with {}", glossary.area(), changed.join(", ")),
        };
        let x = &one.extrapolation;
        let mut words = Vec::new();
        if x.beyond_data {
            words.push(format!(
                "leverage {} exceeds the largest among the {areas} in the model ({})",
                fmt_num(x.leverage),
                fmt_num(x.max_data_leverage)
            ));
        }
        if !x.columns_outside_range.is_empty() {
            let labels: Vec<String> =
                x.columns_outside_range.iter().map(|c| glossary.column(c).label).collect();
            words.push(format!("outside the observed range: {}", labels.join(", ")));
        }
        let p = &one.prediction;
        out.push(BriefScenario {
            description,
            predicts: format!("a {} with these values", glossary.area()),
            predicted: p.fit,
            mean_low: p.mean_interval.low,
            mean_high: p.mean_interval.high,
            new_low: Some(p.new_area_interval.low),
            new_high: Some(p.new_area_interval.high),
            beyond_data: x.beyond_data,
            extrapolation: words.join("; "),
        });
    }
    if let Some(all) = &doc.all_areas {
        let mut words = Vec::new();
        if !all.beyond_data.is_empty() {
            words.push(format!(
                "beyond the data for {} of the {} shifted {areas} ({})",
                all.beyond_data.len(),
                all.areas,
                all.beyond_data.join(", ")
            ));
        }
        if !all.outside_range.is_empty() {
            words.push(format!(
                "outside the observed range for {} of them ({})",
                all.outside_range.len(),
                all.outside_range.join(", ")
            ));
        }
        out.push(BriefScenario {
            description: shift_description(analysis, &all.shift),
            predicts: format!("the average over the {} {areas} in the model", all.areas),
            predicted: all.scenario.fit,
            mean_low: all.scenario.interval.low,
            mean_high: all.scenario.interval.high,
            new_low: None,
            new_high: None,
            beyond_data: !all.beyond_data.is_empty(),
            extrapolation: words.join("; "),
        });
    }
    out
}

fn kept_row(index: usize, v: BriefScenario) -> KeptRow {
    KeptRow {
        index,
        predicted: Figure::new(v.predicted),
        mean_low: Figure::new(v.mean_low),
        mean_high: Figure::new(v.mean_high),
        new_low: v.new_low.map(Figure::new),
        new_high: v.new_high.map(Figure::new),
        beyond: v.beyond_data,
        extrapolation: v.extrapolation,
        description: v.description,
        predicts: v.predicts,
    }
}

/// The settings of every kept scenario, oldest first, as a saved analysis keeps them.
pub fn kept_settings(kept: &[ScenarioDocument]) -> Vec<ScenarioRequest> {
    kept.iter().map(ScenarioRequest::from_document).collect()
}

/// Computes kept scenarios again from their saved settings, with the same computation the
/// page uses, keeping the newest [`KEPT_SCENARIOS_MAX`]. Blocking: it predicts for every area
/// of an all-areas scenario.
pub fn recompute_kept(analysis: &Analysis, kept: &[ScenarioRequest]) -> Result<Vec<ScenarioDocument>> {
    let skip = kept.len().saturating_sub(KEPT_SCENARIOS_MAX);
    kept.iter().skip(skip).map(|request| scenario::compute(analysis, request)).collect()
}

/// Computes a scenario on the blocking pool and keeps it on the analysis for the brief, dropping
/// the oldest past [`KEPT_SCENARIOS_MAX`]. Returns the kept list.
async fn keep(analysis: std::sync::Arc<Analysis>, request: ScenarioRequest) -> Result<Vec<ScenarioDocument>> {
    let a = analysis.clone();
    let doc = blocking(move || scenario::compute(&a, &request)).await?;
    let mut kept = Vec::new();
    analysis.update_extras(|e| {
        e.scenarios.push(doc);
        let excess = e.scenarios.len().saturating_sub(KEPT_SCENARIOS_MAX);
        e.scenarios.drain(..excess);
        kept = e.scenarios.clone();
    })?;
    Ok(kept)
}

/// Percent-encodes a query value (everything but unreserved characters).
fn encode(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for b in text.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.' | b'~') {
            out.push(char::from(b));
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    out
}

/// `POST /analyses/{id}/what-if/keep`: form fields `part` (`one` or `all`) and the scenario's
/// settings as in the page's query (`area` and `x.<column>` for one area; `shift_column`,
/// `shift_op` and `shift_amount` for every area). The scenario is recomputed here and kept for
/// the brief; the answer leads back to the page with the same settings.
pub async fn keep_form(State(ctx): State<Ctx>, Path(id): Path<String>, request: Request) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let pairs = forms::read(request, FormReading::plain("The scenario form could not be read.")).await?;
    let part = pairs.iter().find(|(k, _)| k == "part").map(|(_, v)| v.clone()).unwrap_or_default();
    let back: Vec<String> = pairs
        .iter()
        .filter(|(k, v)| k != "part" && !v.is_empty())
        .map(|(k, v)| format!("{}={}", encode(k), encode(v)))
        .collect();
    let (q, shift) = parse_query(pairs)?;
    let request =
        match part.as_str() {
            "one" => ScenarioRequest { area: q.area, values: q.values, shift: None },
            "all" => ScenarioRequest {
                area: None,
                values: BTreeMap::new(),
                shift: Some(shift.ok_or_else(|| {
                    ServerError::BadRequest("Give the amount to shift every area by.".into())
                })?),
            },
            other => {
                return Err(ServerError::BadRequest(format!(
                    "{other:?} is not a scenario to keep; choose one (one area) or all (every area)."
                )));
            }
        };
    keep(analysis.clone(), request).await?;
    Ok(see_other_to(&format!("/analyses/{}/what-if?{}#kept", analysis.id(), back.join("&"))))
}

/// `POST /analyses/{id}/what-if/forget` with form field `index` (0 for the oldest kept
/// scenario): removes that scenario from the brief and leads back to the page.
pub async fn forget_form(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    request: Request,
) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let pairs = forms::read(request, FormReading::plain("The remove form could not be read.")).await?;
    let text = pairs.iter().find(|(k, _)| k == "index").map(|(_, v)| v.trim().to_owned()).unwrap_or_default();
    let index: usize = text.parse().map_err(|_| {
        ServerError::BadRequest(format!("{text:?} does not name a kept scenario: give its number, from 0."))
    })?;
    let mut found = false;
    analysis.update_extras(|e| {
        if index < e.scenarios.len() {
            e.scenarios.remove(index);
            found = true;
        }
    })?;
    if !found {
        return Err(ServerError::BadRequest(format!("There is no kept scenario number {index}.")));
    }
    Ok(see_other_to(&format!("/analyses/{}/what-if#kept", analysis.id())))
}

/// `POST /api/analyses/{id}/what-if/keep`: computes the scenario of a [`ScenarioRequest`], keeps
/// it for the brief and answers `201` with every kept scenario document, oldest first.
pub async fn keep_json(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    body: Body,
) -> std::result::Result<Response, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let request: ScenarioRequest = json_body(body, "scenario request").await?;
    let kept = keep(analysis, request).await?;
    Ok((StatusCode::CREATED, Json(kept)).into_response())
}

/// `GET /api/analyses/{id}/what-if/kept`: the scenario documents kept for the brief, oldest
/// first (an empty list before any).
pub async fn kept_json(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
) -> std::result::Result<Json<Vec<ScenarioDocument>>, ApiError> {
    let analysis = ctx.analysis(&id)?;
    Ok(Json(analysis.extras()?.scenarios))
}

//! The allocation scenario of the What-if page: reads residents, observed incidents and this
//! year's budget from the analysis' table, supplies model rows for areas the fit left out when
//! their indicator values allow it, runs the engine's `allocate` and records what was used.
//!
//! Areas that cannot take part (no residents, no incident count, or no model-expected
//! incidents because an indicator value is missing) are left out and named in the notes, so
//! the document says which areas the money was divided among.

use wardcast_contract::allocation::AllocationDocument;
use wardcast_contract::dataset::ColumnRole;
use wardcast_contract::scenario::AllocationRequest;
use wardcast_engine::ColumnData;
use wardcast_engine::allocation::{
    AllocationOptions, Basis, BlendWeights, BudgetRow, DEFAULT_DRAWS, DEFAULT_SEED, DistrictInput,
    ExpectedModel, SimulationOptions, allocate,
};

use wardcast_contract::scenario::ValueDoc;

use super::scenario::{cell, predictors};
use crate::error::{Result, ServerError};
use crate::web::state::Analysis;
use crate::web::words::fmt_plain;

/// The largest total accepted: beyond it whole units are no longer exact in floating point.
pub const MAX_TOTAL: u64 = 1_000_000_000_000_000;
/// The longest currency label accepted.
pub const MAX_CURRENCY_CHARS: usize = 24;
/// The note that records the currency label; the page reads the label back from it.
pub const CURRENCY_NOTE: &str = "Amounts are whole units of the currency labelled ";

/// The settings an allocation is made with once defaults are filled in.
#[derive(Debug, Clone, PartialEq)]
pub struct Settings {
    /// The request with every default filled in.
    pub request: AllocationRequest,
    /// The engine's options.
    pub options: AllocationOptions,
}

/// The defaults the page shows: the columns found by role or name, a rate unit read from the
/// response's label, the engine's simulation defaults, and this year's budget total as the
/// total when there is a budget column.
pub fn defaults(analysis: &Analysis) -> AllocationRequest {
    let residents = column_for(analysis, ColumnRole::Population, &["residents", "population"]);
    let incidents = column_for(analysis, ColumnRole::Count, &["assaults", "incidents"]);
    let budget = analysis
        .numeric_columns()
        .into_iter()
        .find(|c| c.to_lowercase().contains("budget"))
        .map(str::to_owned);
    let total = budget
        .as_deref()
        .map(|b| budget_rows(analysis, b).0.iter().map(|r| r.amount).sum::<u64>())
        .filter(|t| *t > 0)
        .unwrap_or(1_000_000);
    AllocationRequest {
        total,
        currency: Some("$".into()),
        basis: "expected".into(),
        blend_weights: None,
        floor: None,
        cap: None,
        draws: Some(DEFAULT_DRAWS),
        seed: Some(DEFAULT_SEED),
        rate_unit: Some(rate_unit_guess(analysis)),
        residents_column: residents,
        incidents_column: incidents,
        budget_column: Some(budget.unwrap_or_default()),
    }
}

fn column_for(analysis: &Analysis, role: ColumnRole, names: &[&str]) -> Option<String> {
    let numeric = analysis.numeric_columns();
    analysis
        .source()
        .columns
        .iter()
        .find(|m| m.role == role && numeric.contains(&m.column.as_str()))
        .map(|m| m.column.clone())
        .or_else(|| names.iter().find(|n| numeric.iter().any(|c| c == *n)).map(|n| (*n).to_owned()))
}

/// The rate unit read from the response's name, label and unit ("per 10,000" → 10,000);
/// 10,000 when they do not say.
fn rate_unit_guess(analysis: &Analysis) -> f64 {
    let spec = analysis.spec();
    let info = analysis.glossary().column(&spec.response);
    let text = format!("{} {} {}", spec.response, info.label, info.unit.unwrap_or_default())
        .to_lowercase()
        .replace([',', ' ', '_'], "");
    [
        ("100000", 100_000.0),
        ("100k", 100_000.0),
        ("10000", 10_000.0),
        ("10k", 10_000.0),
        ("1000", 1_000.0),
        ("1k", 1_000.0),
    ]
    .iter()
    .find(|(pattern, _)| text.contains(&format!("per{pattern}")))
    .map_or(10_000.0, |&(_, unit)| unit)
}

/// This year's budget rows from a column, and notes on values that could not be used.
fn budget_rows(analysis: &Analysis, column: &str) -> (Vec<BudgetRow>, Vec<String>) {
    let table = analysis.table();
    let mut rows = Vec::new();
    let mut bad = Vec::new();
    let Some(ColumnData::Numeric(values)) = table.column(column).map(|c| &c.data) else {
        return (rows, vec![format!("There is no numeric column {column:?} for this year's budget.")]);
    };
    for (key, value) in table.keys().iter().zip(values) {
        match value {
            Some(v) if v.is_finite() && *v >= 0.0 && *v < MAX_TOTAL as f64 => {
                rows.push(BudgetRow { key: key.clone(), amount: v.round() as u64 });
            }
            Some(_) => bad.push(key.clone()),
            None => {}
        }
    }
    let notes = if bad.is_empty() {
        Vec::new()
    } else {
        vec![format!(
            "This year's budget could not be read as a non-negative amount for {}; they are shown without one.",
            bad.join(", ")
        )]
    };
    (rows, notes)
}

fn numeric_column<'a>(analysis: &'a Analysis, name: &str, what: &str) -> Result<&'a [Option<f64>]> {
    match analysis.table().column(name).map(|c| &c.data) {
        Some(ColumnData::Numeric(v)) => Ok(v),
        Some(ColumnData::Text(_)) => Err(ServerError::BadRequest(format!(
            "The column {name:?} chosen for {what} holds text, not numbers."
        ))),
        None => {
            Err(ServerError::BadRequest(format!("There is no column {name:?} for {what} in this table.")))
        }
    }
}

/// Fills in the defaults and checks what the engine does not: the basis name, the blend
/// weights' presence, the total's size, the currency label and the columns.
///
/// # Errors
/// A bad request naming the setting to change.
pub fn settle(analysis: &Analysis, request: &AllocationRequest) -> Result<Settings> {
    let d = defaults(analysis);
    if request.total > MAX_TOTAL {
        return Err(ServerError::BadRequest(format!(
            "The budget total must be at most {MAX_TOTAL} currency units."
        )));
    }
    let basis = match request.basis.trim() {
        "population" => Basis::Population,
        "observed" => Basis::Observed,
        "expected" => Basis::Expected,
        "blend" => {
            let w = request
                .blend_weights
                .ok_or_else(|| ServerError::BadRequest("A blended basis needs its three weights.".into()))?;
            Basis::Blend(BlendWeights {
                population: w.population,
                observed: w.observed,
                expected: w.expected,
            })
        }
        other => {
            return Err(ServerError::BadRequest(format!(
                "{other:?} is not a basis; choose population, observed, expected or blend."
            )));
        }
    };
    let currency = request.currency.clone().or(d.currency).unwrap_or_default().trim().to_owned();
    if currency.chars().count() > MAX_CURRENCY_CHARS || currency.chars().any(char::is_control) {
        return Err(ServerError::BadRequest(format!(
            "The currency label must be at most {MAX_CURRENCY_CHARS} printable characters."
        )));
    }
    let rate_unit = request.rate_unit.or(d.rate_unit).unwrap_or(10_000.0);
    if !(rate_unit.is_finite() && rate_unit > 0.0) {
        return Err(ServerError::BadRequest("The rate unit must be a positive number, e.g. 10000.".into()));
    }
    let residents = request.residents_column.clone().or(d.residents_column).ok_or_else(|| {
        ServerError::BadRequest("Choose the column that holds each area's residents.".into())
    })?;
    let incidents = request.incidents_column.clone().or(d.incidents_column).ok_or_else(|| {
        ServerError::BadRequest("Choose the column that holds each area's observed incidents.".into())
    })?;
    numeric_column(analysis, &residents, "residents")?;
    numeric_column(analysis, &incidents, "observed incidents")?;
    let budget = request.budget_column.clone().or(d.budget_column).unwrap_or_default();
    if !budget.is_empty() {
        numeric_column(analysis, &budget, "this year's budget")?;
    }
    let draws = request.draws.unwrap_or(DEFAULT_DRAWS);
    let seed = request.seed.unwrap_or(DEFAULT_SEED);
    let options = AllocationOptions {
        total: request.total,
        basis,
        floor: request.floor,
        cap: request.cap,
        simulation: SimulationOptions { draws, seed },
    };
    Ok(Settings {
        request: AllocationRequest {
            total: request.total,
            currency: Some(currency),
            basis: basis.name().to_owned(),
            blend_weights: if matches!(basis, Basis::Blend(_)) { request.blend_weights } else { None },
            floor: request.floor,
            cap: request.cap,
            draws: Some(draws),
            seed: Some(seed),
            rate_unit: Some(rate_unit),
            residents_column: Some(residents),
            incidents_column: Some(incidents),
            budget_column: Some(budget),
        },
        options,
    })
}

/// The engine's inputs for an allocation: the areas taking part, the model rows supplied for
/// areas outside the fit, this year's budget rows, and notes on everything left out.
pub struct Inputs {
    /// The areas taking part.
    pub districts: Vec<DistrictInput>,
    /// Design rows for areas the fit did not use.
    pub extra_rows: Vec<(String, Vec<f64>)>,
    /// This year's budget.
    pub budgets: Vec<BudgetRow>,
    /// What was left out and why, and where the numbers came from.
    pub notes: Vec<String>,
}

/// Reads the engine's inputs from the analysis' table with settled settings.
///
/// # Errors
/// A bad request when a chosen column is missing or holds text.
pub fn inputs(analysis: &Analysis, settings: &AllocationRequest) -> Result<Inputs> {
    let table = analysis.table();
    let residents_col = settings.residents_column.clone().unwrap_or_default();
    let incidents_col = settings.incidents_column.clone().unwrap_or_default();
    let residents = numeric_column(analysis, &residents_col, "residents")?;
    let incidents = numeric_column(analysis, &incidents_col, "observed incidents")?;
    let design = analysis.fitted().fit().design();
    let fitted: std::collections::HashSet<&str> = design.keys().iter().map(String::as_str).collect();
    let columns: Vec<String> = predictors(analysis).into_iter().map(|p| p.column).collect();
    let mut districts = Vec::new();
    let mut extra_rows = Vec::new();
    let mut left_out = Vec::new();
    for (i, key) in table.keys().iter().enumerate() {
        let r = residents.get(i).copied().flatten().filter(|v| v.is_finite());
        let o = incidents.get(i).copied().flatten().filter(|v| v.is_finite());
        let (Some(r), Some(o)) = (r, o) else {
            left_out.push(format!("{key} (no value for {residents_col} or {incidents_col})"));
            continue;
        };
        if !fitted.contains(key.as_str()) {
            let mut values = Vec::with_capacity(columns.len());
            let mut missing = None;
            for c in &columns {
                match cell(table, c, i) {
                    Some(ValueDoc::Number(x)) => {
                        values.push((c.clone(), wardcast_engine::PredictorValue::Number(x)));
                    }
                    Some(ValueDoc::Level(l)) => {
                        values.push((c.clone(), wardcast_engine::PredictorValue::Level(l)));
                    }
                    None => {
                        missing = Some(c.clone());
                        break;
                    }
                }
            }
            if let Some(c) = missing {
                left_out.push(format!("{key} (no value for {c}, so no model-expected incidents)"));
                continue;
            }
            match design.row_for_prediction(&values) {
                Ok(row) => extra_rows.push((key.clone(), row)),
                Err(e) => {
                    left_out.push(format!("{key} (no model-expected incidents: {e})"));
                    continue;
                }
            }
        }
        districts.push(DistrictInput { key: key.clone(), residents: r, observed: o });
    }
    let budget_col = settings.budget_column.clone().unwrap_or_default();
    let (budgets, mut budget_notes) =
        if budget_col.is_empty() { (Vec::new(), Vec::new()) } else { budget_rows(analysis, &budget_col) };
    let mut notes = vec![format!(
        "Residents from the column {residents_col}, observed incidents from {incidents_col}, this year's budget \
         from {}; model-expected incidents are the predicted rate per {} residents times residents.",
        if budget_col.is_empty() { "no column (none chosen)".to_owned() } else { budget_col },
        fmt_plain(settings.rate_unit.unwrap_or(10_000.0))
    )];
    if !left_out.is_empty() {
        notes.push(format!("Left out of the allocation: {}.", left_out.join("; ")));
    }
    if let Some(join) = &analysis.source().join
        && !join.unmatched_right.is_empty()
    {
        notes.push(format!(
            "Rows of the second table of the join (this year's budget in the usual set-up) that matched no area, so \
             their amounts are not in this table: {}.",
            join.unmatched_right.join(", ")
        ));
    }
    notes.append(&mut budget_notes);
    Ok(Inputs { districts, extra_rows, budgets, notes })
}

/// Runs the allocation and returns its document with the notes on inputs and currency.
/// Blocking numerics (the coefficient simulation): call it from `blocking`.
///
/// # Errors
/// Bad requests from [`settle`] and [`inputs`]; the engine's own errors (infeasible floors and
/// caps, blend weights that do not sum to 1, too few draws…) as they come.
pub fn run(analysis: &Analysis, request: &AllocationRequest) -> Result<AllocationDocument> {
    let settings = settle(analysis, request)?;
    let inputs = inputs(analysis, &settings.request)?;
    let model = ExpectedModel {
        fit: analysis.fitted().fit(),
        rate_unit: settings.request.rate_unit.unwrap_or(10_000.0),
        extra_rows: inputs.extra_rows,
    };
    let allocation = allocate(&inputs.districts, &inputs.budgets, &model, &settings.options)?;
    let mut doc = AllocationDocument::from_allocation(&allocation);
    doc.notes.extend(inputs.notes);
    let currency = settings.request.currency.unwrap_or_default();
    if !currency.is_empty() {
        doc.notes.push(format!("{CURRENCY_NOTE}{currency}."));
    }
    Ok(doc)
}

/// The currency label recorded in an allocation document's notes.
pub fn currency_of(doc: &AllocationDocument) -> String {
    doc.notes
        .iter()
        .find_map(|n| n.strip_prefix(CURRENCY_NOTE).and_then(|rest| rest.strip_suffix('.')))
        .unwrap_or_default()
        .to_owned()
}

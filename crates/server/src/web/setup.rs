//! The Data section of an analysis: its source table, the model set-up form, refits and exclusions.
//!
//! | Route                                | What it does                                               |
//! |--------------------------------------|------------------------------------------------------------|
//! | `GET /analyses/{id}/data`            | the source in words, the set-up form, the save form         |
//! | `POST /analyses/{id}/refit`          | a new analysis from the set-up form (303 to its Effects)    |
//! | `POST /analyses/{id}/exclude`        | a new analysis leaving one more area out (303 to `then`)    |
//! | `POST /analyses/{id}/save`           | writes the analysis into the data folder (303 back)         |
//! | `GET /api/analyses/{id}/spec`        | the model spec                                              |
//! | `POST /api/analyses/{id}/refit`      | `{spec, name?}` → 201 `{id, page, fit}`                     |
//! | `POST /api/analyses/{id}/exclude`    | `{key, reason}` → 201 `{id, page, fit}`                     |
//! | `POST /api/analyses/{id}/save`       | `{title, question?, author?}` → the saved analysis          |
//!
//! A changed spec never changes an existing analysis: every refit and exclusion is a new
//! analysis on the same source, with its own id, whose parent is the analysis it came from.

use std::collections::{BTreeSet, HashMap, HashSet};
use std::sync::Arc;

use askama::Template;
use axum::Json;
use axum::extract::{Path, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use axum::{Router, extract::Request};
use serde::{Deserialize, Serialize};
use wardcast_contract::dataset::{ColumnMeta, ColumnRole, CvSettings, SavedAnalysis};
use wardcast_contract::fit::FitDocument;
use wardcast_contract::scenario::SavedScenarios;
use wardcast_contract::spec::{ExclusionSpec, ModelSpec, PredictorSpec, TransformSpec};
use wardcast_engine::{ColumnData, Table};
use wardcast_report::brief::ChoiceCv;

use super::forms::{self, FormReading};
use super::pages::{Layout, Section, render, section_href};
use super::state::{Analysis, AnalysisParts, AppState, Glossary, Source};
use super::{Ctx, blocking, read_body, see_other_to};
use crate::error::{ApiError, Result, ServerError};

/// The longest reason, title, question or author name accepted, in characters.
pub const MAX_TEXT: usize = 500;
/// The largest form or JSON body these routes read.
const BODY_LIMIT: usize = 256 * 1024;
/// Text columns with more distinct values than this get no reference-level choice.
const MAX_LEVELS: usize = 100;

/// The routes of the Data section.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
        .route("/analyses/{id}/data", get(data_page))
        .route("/analyses/{id}/refit", post(refit_form))
        .route("/analyses/{id}/exclude", post(exclude_form))
        .route("/analyses/{id}/save", post(save_form))
        .route("/api/analyses/{id}/spec", get(api_spec))
        .route("/api/analyses/{id}/refit", post(api_refit))
        .route("/api/analyses/{id}/exclude", post(api_exclude))
        .route("/api/analyses/{id}/save", post(api_save))
}

// ---- Reading request bodies ----

/// How the set-up, exclusion and save forms are read.
const FORM: FormReading = FormReading {
    limit: BODY_LIMIT,
    not_a_form: "This address takes a form (application/x-www-form-urlencoded), sent from the page.",
    unreadable: "The form could not be read. Send it again from the page.",
};

/// Reads a JSON post into `T`.
async fn read_json<T: serde::de::DeserializeOwned>(request: Request) -> Result<T> {
    if !forms::content_type_is(request.headers(), "application/json") {
        return Err(ServerError::BadRequest("This address takes a JSON body (application/json).".into()));
    }
    let bytes = read_body(request.into_body(), BODY_LIMIT).await?;
    serde_json::from_slice(&bytes)
        .map_err(|e| ServerError::BadRequest(format!("The JSON body could not be read: {e}.")))
}

/// A form's fields looked up by name.
struct Fields {
    all: Vec<(String, String)>,
}

impl Fields {
    fn first(&self, name: &str) -> Option<&str> {
        forms::first(&self.all, name)
    }

    fn every(&self, name: &str) -> Vec<&str> {
        self.all.iter().filter(|(n, _)| n == name).map(|(_, v)| v.as_str()).collect()
    }
}

// ---- Checking a spec against the table ----

/// What a refit or exclusion could not accept: the analyst's mistakes (400) or the engine's
/// refusal (422), with plain sentences.
#[derive(Debug)]
pub enum Refusal {
    /// The request names unknown columns or keys, or misses a reason.
    Problems(Vec<String>),
    /// The spec is well formed but the model cannot be fitted.
    Unfittable(ServerError),
}

impl Refusal {
    fn status(&self) -> StatusCode {
        match self {
            Refusal::Problems(_) => StatusCode::BAD_REQUEST,
            Refusal::Unfittable(e) => e.status(),
        }
    }

    fn messages(&self) -> Vec<String> {
        match self {
            Refusal::Problems(p) => p.clone(),
            Refusal::Unfittable(e) => vec![e.public_message()],
        }
    }

    fn into_error(self) -> ServerError {
        match self {
            Refusal::Problems(p) => ServerError::BadRequest(p.join(" ")),
            Refusal::Unfittable(e) => e,
        }
    }
}

fn is_numeric(table: &Table, column: &str) -> Option<bool> {
    table.column(column).map(|c| c.data.is_numeric())
}

/// The distinct non-missing values of a text column, sorted.
fn levels_of(table: &Table, column: &str) -> Vec<String> {
    match table.column(column).map(|c| &c.data) {
        Some(ColumnData::Text(values)) => {
            values.iter().flatten().cloned().collect::<BTreeSet<String>>().into_iter().collect()
        }
        _ => Vec::new(),
    }
}

/// Checks a spec against the table for the mistakes the analyst can fix in the form: unknown
/// columns and keys, the response among the predictors, transforms on text, reference levels
/// that do not exist, a level outside (0, 1), exclusions without reasons. Returns every
/// problem found, in plain sentences.
pub fn spec_problems(spec: &ModelSpec, table: &Table) -> Vec<String> {
    let mut problems = Vec::new();
    match is_numeric(table, &spec.response) {
        None => problems.push(format!("The outcome column {:?} is not in the table.", spec.response)),
        Some(false) => {
            problems.push(format!("The outcome column {:?} holds text, not numbers.", spec.response))
        }
        Some(true) => {}
    }
    let mut seen = HashSet::new();
    for p in &spec.predictors {
        if p.column == spec.response {
            problems.push(format!(
                "{:?} is the outcome, so it cannot also be an indicator; untick it or choose another outcome.",
                p.column
            ));
            continue;
        }
        if !seen.insert((p.column.clone(), p.transform.map(|t| format!("{t:?}")))) {
            problems.push(format!("The indicator {:?} is listed twice with the same transform.", p.column));
        }
        match is_numeric(table, &p.column) {
            None => problems.push(format!("The indicator column {:?} is not in the table.", p.column)),
            Some(numeric) => {
                if let Some(t) = p.transform {
                    if !numeric {
                        problems.push(format!("{:?} holds text, so it cannot be transformed.", p.column));
                    }
                    if let TransformSpec::Power { lambda } = t
                        && !lambda.is_finite()
                    {
                        problems.push(format!("The power for {:?} must be a finite number.", p.column));
                    }
                }
                if let Some(level) = &p.reference_level {
                    if numeric {
                        problems.push(format!(
                            "{:?} holds numbers, so it has no reference level; leave the level empty.",
                            p.column
                        ));
                    } else if !levels_of(table, &p.column).contains(level) {
                        problems.push(format!(
                            "{:?} has no value {:?} to compare the others with.",
                            p.column, level
                        ));
                    }
                }
            }
        }
    }
    if let Some(TransformSpec::Power { lambda }) = spec.response_transform
        && !lambda.is_finite()
    {
        problems.push("The power for the outcome must be a finite number.".into());
    }
    if let Some(w) = &spec.weights {
        match is_numeric(table, w) {
            None => problems.push(format!("The weights column {w:?} is not in the table.")),
            Some(false) => problems.push(format!("The weights column {w:?} holds text, not numbers.")),
            Some(true) => {}
        }
    }
    if !(spec.level > 0.0 && spec.level < 1.0) {
        problems.push("The interval level must lie strictly between 0% and 100%.".into());
    }
    let keys: HashSet<&str> = table.keys().iter().map(String::as_str).collect();
    let mut excluded = HashSet::new();
    for e in &spec.exclusions {
        if !keys.contains(e.key.as_str()) {
            problems.push(format!("No area in the table has the key {:?}.", e.key));
        }
        if e.reason.trim().is_empty() {
            problems.push(format!("Leaving out {:?} needs a reason.", e.key));
        } else if e.reason.chars().count() > MAX_TEXT {
            problems.push(format!(
                "The reason for leaving out {:?} is longer than {MAX_TEXT} characters.",
                e.key
            ));
        }
        if !excluded.insert(e.key.as_str()) {
            problems.push(format!("{:?} is left out twice.", e.key));
        }
    }
    problems
}

/// Builds a new analysis from `parent` with `spec`: the same source and glossary, a fresh id
/// made from `name`, fitted and checked on the blocking pool, then added to the workspace.
pub async fn derive_analysis(
    app: &AppState,
    parent: &Arc<Analysis>,
    spec: ModelSpec,
    name: String,
) -> std::result::Result<Arc<Analysis>, Refusal> {
    let problems = spec_problems(&spec, parent.table());
    if !problems.is_empty() {
        return Err(Refusal::Problems(problems));
    }
    if let Err(e) = spec.validate() {
        return Err(Refusal::Unfittable(e.into()));
    }
    let id = app.fresh_id(&name).map_err(Refusal::Unfittable)?;
    let parts = AnalysisParts {
        id,
        name,
        glossary: parent.glossary().clone(),
        source: parent.source().clone(),
        spec,
        parent: Some(parent.id().to_owned()),
    };
    let built = blocking(move || {
        let analysis = Analysis::build(parts)?;
        analysis.checks();
        Ok(analysis)
    })
    .await
    .map_err(Refusal::Unfittable)?;
    let extras = parent.extras().map_err(Refusal::Unfittable)?;
    built
        .update_extras(|e| {
            e.question = extras.question;
            e.author = extras.author;
        })
        .map_err(Refusal::Unfittable)?;
    app.insert_new(built).map_err(Refusal::Unfittable)
}

// ---- The set-up form ----

/// What the set-up form posted: the spec it describes (possibly unfinished) and the name.
struct PostedSetup {
    spec: ModelSpec,
    name: String,
    problems: Vec<String>,
}

const TRANSFORMS: [(&str, &str); 6] = [
    ("none", "as is"),
    ("log", "logarithm"),
    ("sqrt", "square root"),
    ("reciprocal", "reciprocal (1/x)"),
    ("square", "square"),
    ("power", "power λ"),
];

fn transform_name(t: Option<TransformSpec>) -> &'static str {
    match t {
        None => "none",
        Some(TransformSpec::Log) => "log",
        Some(TransformSpec::Sqrt) => "sqrt",
        Some(TransformSpec::Reciprocal) => "reciprocal",
        Some(TransformSpec::Square) => "square",
        Some(TransformSpec::Power { .. }) => "power",
    }
}

/// Reads the set-up form into a spec. Mistakes become sentences in `problems`, and the spec
/// keeps what could be read so the form can be shown again as the analyst left it.
fn read_setup(fields: &Fields, current: &ModelSpec) -> PostedSetup {
    let mut problems = Vec::new();
    let name = fields.first("name").unwrap_or("").trim().to_owned();
    if name.chars().count() > MAX_TEXT {
        problems.push(format!("The name is longer than {MAX_TEXT} characters."));
    }
    let response = match fields.first("response") {
        Some(r) if !r.is_empty() => r.to_owned(),
        _ => {
            problems.push("Choose the outcome column.".into());
            current.response.clone()
        }
    };
    let mut predictors = Vec::new();
    for column in fields.every("predictor") {
        let transform = match fields.first(&format!("transform.{column}")).unwrap_or("none") {
            "" | "none" => None,
            "log" => Some(TransformSpec::Log),
            "sqrt" => Some(TransformSpec::Sqrt),
            "reciprocal" => Some(TransformSpec::Reciprocal),
            "square" => Some(TransformSpec::Square),
            "power" => {
                let text = fields.first(&format!("lambda.{column}")).unwrap_or("").trim();
                match text.parse::<f64>() {
                    Ok(lambda) if lambda.is_finite() => Some(TransformSpec::Power { lambda }),
                    _ => {
                        problems.push(format!(
                            "The power λ for {column:?} must be a number, such as 0.5 or -1 (got {text:?})."
                        ));
                        None
                    }
                }
            }
            other => {
                problems.push(format!("{other:?} is not a transform offered for {column:?}."));
                None
            }
        };
        let reference_level =
            fields.first(&format!("reference.{column}")).filter(|l| !l.is_empty()).map(str::to_owned);
        predictors.push(PredictorSpec { column: column.to_owned(), transform, reference_level });
    }
    // Indicators already in the model keep their order (it matters to the sequential sums of
    // squares); new ones follow in table order.
    predictors
        .sort_by_key(|p| current.predictors.iter().position(|c| c.column == p.column).unwrap_or(usize::MAX));
    let weights = fields.first("weights").filter(|w| !w.is_empty()).map(str::to_owned);
    let intercept = match fields.first("intercept").unwrap_or("yes") {
        "yes" => true,
        "no" => false,
        other => {
            problems.push(format!("{other:?} is not a choice for the intercept; use yes or no."));
            true
        }
    };
    let level_text = fields.first("level").unwrap_or("95").trim();
    let level = match level_text.parse::<f64>() {
        Ok(pct) if pct > 0.0 && pct < 100.0 => pct / 100.0,
        _ => {
            problems.push(format!(
                "The interval level is a percentage strictly between 0 and 100, such as 95 (got {level_text:?})."
            ));
            current.level
        }
    };
    let removed: HashSet<&str> = fields.every("ex_remove").into_iter().collect();
    let keys = fields.every("ex_key");
    let reasons = fields.every("ex_reason");
    if keys.len() != reasons.len() {
        problems.push("Each left-out area needs both its key and a reason.".into());
    }
    let mut exclusions = Vec::new();
    for (key, reason) in keys.iter().zip(&reasons) {
        let key = key.trim();
        let reason = reason.trim();
        if key.is_empty() && reason.is_empty() || removed.contains(key) {
            continue;
        }
        if key.is_empty() {
            problems
                .push(format!("The reason {reason:?} was given without the key of the area to leave out."));
            continue;
        }
        exclusions.push(ExclusionSpec { key: key.to_owned(), reason: reason.to_owned() });
    }
    let spec = ModelSpec {
        schema_version: current.schema_version.clone(),
        response,
        response_transform: current.response_transform,
        predictors,
        intercept,
        weights,
        exclusions,
        level,
    };
    PostedSetup { spec, name, problems }
}

// ---- The Data page ----

/// One column of the source, described.
#[derive(Debug, Clone)]
pub struct ColumnLine {
    /// The column name (user data).
    pub name: String,
    /// Its label, or empty.
    pub label: String,
    /// Its unit, or empty.
    pub unit: String,
    /// Its role in words.
    pub role: String,
    /// The agency it comes from, or empty.
    pub agency: String,
    /// The year the values describe, or empty.
    pub vintage: String,
    /// `numbers` or `text`.
    pub kind: &'static str,
    /// Missing cells.
    pub missing: usize,
}

/// One row of the predictor table of the form.
#[derive(Debug, Clone)]
pub struct PredictorChoice {
    /// The column name (user data; also part of field names).
    pub column: String,
    /// The label shown beside it.
    pub label: String,
    /// Whether it is in the model.
    pub chosen: bool,
    /// Whether it holds numbers (transforms) or text (reference level).
    pub numeric: bool,
    /// The chosen transform's form value.
    pub transform: &'static str,
    /// The λ of a power transform, or empty.
    pub lambda: String,
    /// The levels of a text column (empty for numbers or too many levels).
    pub levels: Vec<String>,
    /// The chosen reference level, or empty for the default.
    pub reference: String,
}

/// An exclusion in the form.
#[derive(Debug, Clone)]
pub struct ExclusionLine {
    /// The area key.
    pub key: String,
    /// The reason.
    pub reason: String,
}

/// The save status and form.
#[derive(Debug, Clone)]
pub struct SaveBox {
    /// Whether the workspace has a data folder.
    pub available: bool,
    /// Why this analysis cannot be saved (its table is not stored), or empty.
    pub blocked: String,
    /// The dataset version it would be saved against, or empty.
    pub dataset: String,
    /// A sentence saying where and when it was saved, or empty when never saved.
    pub saved: String,
    /// The title field's value.
    pub title: String,
    /// The question field's value.
    pub question: String,
    /// The author field's value.
    pub author: String,
}

/// The Data page.
#[derive(Debug, Template)]
#[template(path = "setup.html")]
pub struct DataPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id.
    pub id: String,
    /// The plural noun for areas.
    pub areas: String,
    /// What was refused, when the page answers a refused form.
    pub problems: Vec<String>,
    /// The source name.
    pub source_name: String,
    /// The store reference, or empty.
    pub dataset: String,
    /// Rows in the table.
    pub rows: usize,
    /// Rows the model used.
    pub rows_used: usize,
    /// The key column's name, or empty when unknown.
    pub key_column: String,
    /// The columns.
    pub columns: Vec<ColumnLine>,
    /// The join, in words.
    pub join: Option<JoinLines>,
    /// Data notes.
    pub notes: Vec<String>,
    /// `(version, checksum)` pairs.
    pub checksums: Vec<(String, String)>,
    /// Rows dropped for missing values: `(key, reason)`.
    pub missing_rows: Vec<(String, String)>,
    /// The analyst's exclusions in the current model.
    pub exclusions: Vec<ExclusionLine>,
    /// The parent analysis, when this one was refitted from another: `(id, href)`.
    pub parent: Option<(String, String)>,
    /// The outcome choices: `(column, label, selected)`.
    pub responses: Vec<(String, String, bool)>,
    /// The predictor rows.
    pub predictors: Vec<PredictorChoice>,
    /// The transform options: `(value, words)`.
    pub transforms: Vec<(&'static str, &'static str)>,
    /// The weights choices: `(column, label, selected)`.
    pub weights: Vec<(String, String, bool)>,
    /// Whether the model is unweighted.
    pub no_weights: bool,
    /// Whether the model has an intercept.
    pub intercept: bool,
    /// The interval level in percent.
    pub level_pct: String,
    /// The exclusions shown in the form (may differ from the model's after a refused post).
    pub form_exclusions: Vec<ExclusionLine>,
    /// The suggested name of the new analysis.
    pub new_name: String,
    /// The save box.
    pub save: SaveBox,
}

/// The join report in words.
#[derive(Debug, Clone)]
pub struct JoinLines {
    /// A sentence naming the two tables, the keys and the kind of join.
    pub summary: String,
    /// Left keys with no partner.
    pub unmatched_left: Vec<String>,
    /// Right keys with no partner.
    pub unmatched_right: Vec<String>,
    /// Keys repeated on either side.
    pub duplicates: Vec<String>,
    /// Renamed columns: `(old, new)`.
    pub renamed: Vec<(String, String)>,
}

fn role_words(role: ColumnRole) -> &'static str {
    match role {
        ColumnRole::Key => "area key",
        ColumnRole::Count => "count",
        ColumnRole::Population => "population",
        ColumnRole::Rate => "rate",
        ColumnRole::Indicator => "indicator",
        ColumnRole::Group => "group",
    }
}

fn column_line(name: &str, meta: Option<&ColumnMeta>, data: Option<&ColumnData>) -> ColumnLine {
    let text = |v: Option<&String>| v.cloned().unwrap_or_default();
    ColumnLine {
        name: name.to_owned(),
        label: text(meta.and_then(|m| m.label.as_ref())),
        unit: text(meta.and_then(|m| m.unit.as_ref())),
        role: meta.map_or("", |m| role_words(m.role)).to_owned(),
        agency: text(meta.and_then(|m| m.source.as_ref())),
        vintage: meta.and_then(|m| m.vintage).map(|v| v.to_string()).unwrap_or_default(),
        kind: match data {
            Some(ColumnData::Text(_)) => "text",
            _ => "numbers",
        },
        missing: data.map_or(0, |d| (0..d.len()).filter(|&i| d.is_missing(i)).count()),
    }
}

/// What the page shows in the form: the spec and name to prefill, and the problems to show.
struct FormState {
    spec: ModelSpec,
    name: String,
    problems: Vec<String>,
}

impl DataPage {
    fn build(analysis: &Analysis, shared: bool, form: Option<FormState>, save: SaveBox) -> Self {
        let source = analysis.source();
        let table = &source.table;
        let meta: HashMap<&str, &ColumnMeta> =
            source.columns.iter().map(|m| (m.column.as_str(), m)).collect();
        let key_meta = source.columns.iter().find(|m| m.role == ColumnRole::Key);
        let mut columns = Vec::new();
        if let Some(k) = key_meta {
            columns.push(column_line(&k.column, Some(k), None));
        }
        for c in table.columns() {
            columns.push(column_line(&c.name, meta.get(c.name.as_str()).copied(), Some(&c.data)));
        }
        let join = source.join.as_ref().map(|j| {
            let kind = match j.kind {
                wardcast_contract::dataset::JoinKind::Inner => "kept only the keys found in both",
                wardcast_contract::dataset::JoinKind::Left => "kept every row of the first",
            };
            // Tables joined before they were stored have no names of their own.
            let (left, right) = if j.left == j.right {
                ("The first table".to_owned(), "the second".to_owned())
            } else {
                (format!("“{}”", j.left), format!("“{}”", j.right))
            };
            JoinLines {
                summary: format!(
                    "{left} was joined with {right} on {} = {}; the join {kind} table. {} keys matched and \
                     the result has {} rows.",
                    j.left_key, j.right_key, j.matched, j.rows
                ),
                unmatched_left: j.unmatched_left.clone(),
                unmatched_right: j.unmatched_right.clone(),
                duplicates: j.duplicates_left.iter().chain(&j.duplicates_right).cloned().collect(),
                renamed: j.renamed.clone(),
            }
        });
        let fit = analysis.fit();
        let missing_rows = fit
            .rows_dropped
            .iter()
            .filter(|d| !d.reason.starts_with("excluded: "))
            .map(|d| (d.key.clone(), d.reason.clone()))
            .collect();
        let exclusions = analysis
            .spec()
            .exclusions
            .iter()
            .map(|e| ExclusionLine { key: e.key.clone(), reason: e.reason.clone() })
            .collect();

        let FormState { spec, name, problems } = form.unwrap_or_else(|| FormState {
            spec: analysis.spec().clone(),
            name: format!("{}, revised", analysis.name()),
            problems: Vec::new(),
        });
        let glossary = analysis.glossary();
        let label = |c: &str| {
            let l = glossary.column(c).label;
            if l == c { String::new() } else { l }
        };
        let responses = table
            .columns()
            .iter()
            .filter(|c| c.data.is_numeric())
            .map(|c| (c.name.clone(), label(&c.name), c.name == spec.response))
            .collect();
        let weights = table
            .columns()
            .iter()
            .filter(|c| c.data.is_numeric())
            .map(|c| (c.name.clone(), label(&c.name), spec.weights.as_deref() == Some(c.name.as_str())))
            .collect();
        let predictors = table
            .columns()
            .iter()
            .map(|c| {
                let chosen = spec.predictors.iter().find(|p| p.column == c.name);
                let numeric = c.data.is_numeric();
                let mut levels = if numeric { Vec::new() } else { levels_of(table, &c.name) };
                if levels.len() > MAX_LEVELS {
                    levels.clear();
                }
                PredictorChoice {
                    column: c.name.clone(),
                    label: label(&c.name),
                    chosen: chosen.is_some(),
                    numeric,
                    transform: transform_name(chosen.and_then(|p| p.transform)),
                    lambda: match chosen.and_then(|p| p.transform) {
                        Some(TransformSpec::Power { lambda }) => format!("{lambda}"),
                        _ => String::new(),
                    },
                    levels,
                    reference: chosen.and_then(|p| p.reference_level.clone()).unwrap_or_default(),
                }
            })
            .collect();
        let form_exclusions = spec
            .exclusions
            .iter()
            .map(|e| ExclusionLine { key: e.key.clone(), reason: e.reason.clone() })
            .collect();

        DataPage {
            layout: Layout::analysis(
                "Data and set-up",
                shared,
                analysis.id(),
                analysis.name(),
                Section::Data,
            ),
            id: analysis.id().to_owned(),
            areas: glossary.areas().to_owned(),
            problems,
            source_name: source.name.clone(),
            dataset: source.dataset.clone().unwrap_or_default(),
            rows: table.nrows(),
            rows_used: fit.rows_used,
            key_column: key_meta.map(|k| k.column.clone()).unwrap_or_default(),
            columns,
            join,
            notes: source.notes.clone(),
            checksums: source.checksums.iter().map(|c| (c.version_id.clone(), c.checksum.clone())).collect(),
            missing_rows,
            exclusions,
            parent: analysis.parent().map(|p| (p.to_owned(), section_href(p, Section::Data))),
            responses,
            predictors,
            transforms: TRANSFORMS.to_vec(),
            weights,
            no_weights: spec.weights.is_none(),
            intercept: spec.intercept,
            level_pct: format!("{}", (spec.level * 1000.0).round() / 10.0),
            form_exclusions,
            new_name: name,
            save,
        }
    }
}

/// The save box for an analysis: whether there is a data folder, and whether and where this
/// analysis is saved. Reads the store on the blocking pool.
async fn save_box(app: &AppState, analysis: &Arc<Analysis>) -> Result<SaveBox> {
    let extras = analysis.extras()?;
    let dataset = analysis.source().dataset.clone().unwrap_or_default();
    let mut save = SaveBox {
        available: app.store().is_some(),
        blocked: String::new(),
        dataset: dataset.clone(),
        saved: String::new(),
        title: analysis.name().to_owned(),
        question: extras.question.unwrap_or_default(),
        author: extras.author.unwrap_or_default(),
    };
    if dataset.is_empty() {
        save.blocked = "This analysis' table is not kept in the data folder, so the analysis cannot be \
                        saved there. Save the table on the Tables pages first, then fit the model on it."
            .into();
    }
    if let Some(store) = app.store().cloned() {
        let id = analysis.id().to_owned();
        let saved = blocking(move || {
            let store =
                store.lock().map_err(|_| ServerError::Internal("the store lock was poisoned".into()))?;
            Ok(store.analysis(&id).ok().cloned())
        })
        .await?;
        if let Some(s) = saved {
            save.saved = format!(
                "Saved in the data folder as analyses/{}.json, titled “{}”, against table version {}; \
                 last saved {}.",
                s.id,
                s.title,
                s.dataset_version,
                crate::analysis::civil_date(i64::try_from(s.updated_unix / 86_400).unwrap_or(0))
            );
            save.title = s.title;
        }
    }
    Ok(save)
}

/// `GET /analyses/{id}/data`.
async fn data_page(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let save = save_box(ctx.app(), &analysis).await?;
    Ok(render(&DataPage::build(&analysis, ctx.shared(), None, save)))
}

/// The Data page again with what was refused, under the refusal's status.
async fn refused_page(
    ctx: &Ctx,
    analysis: &Arc<Analysis>,
    form: FormState,
    status: StatusCode,
) -> Result<Response> {
    let save = save_box(ctx.app(), analysis).await?;
    let mut response = render(&DataPage::build(analysis, ctx.shared(), Some(form), save));
    *response.status_mut() = status;
    Ok(response)
}

/// `POST /analyses/{id}/refit`: the set-up form.
async fn refit_form(State(ctx): State<Ctx>, Path(id): Path<String>, request: Request) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let fields = Fields { all: forms::read(request, FORM).await? };
    let PostedSetup { spec, name, mut problems } = read_setup(&fields, analysis.spec());
    problems.extend(spec_problems(&spec, analysis.table()));
    let name = if name.is_empty() { format!("{}, revised", analysis.name()) } else { name };
    if !problems.is_empty() {
        problems.dedup();
        return refused_page(&ctx, &analysis, FormState { spec, name, problems }, StatusCode::BAD_REQUEST)
            .await;
    }
    match derive_analysis(ctx.app(), &analysis, spec.clone(), name.clone()).await {
        Ok(new) => Ok(see_other_to(&section_href(new.id(), Section::Effects))),
        Err(refusal) => {
            let status = refusal.status();
            if status.is_server_error() {
                return Err(refusal.into_error());
            }
            let problems = refusal.messages();
            refused_page(&ctx, &analysis, FormState { spec, name, problems }, status).await
        }
    }
}

/// Where `then` sends the browser after an exclusion.
fn then_section(then: Option<&str>) -> Result<Section> {
    match then.map(str::trim) {
        None | Some("") | Some("soundness") => Ok(Section::Soundness),
        Some("effects") => Ok(Section::Effects),
        Some("areas") => Ok(Section::Areas),
        Some(_) => Err(ServerError::BadRequest(
            "After leaving an area out, wardcast can show soundness, effects or areas.".into(),
        )),
    }
}

/// The old spec plus one exclusion, checked: a known key not already left out, a reason of
/// at most [`MAX_TEXT`] characters.
fn with_exclusion(analysis: &Analysis, key: &str, reason: &str) -> Result<ModelSpec> {
    let key = key.trim();
    let reason = reason.trim();
    if key.is_empty() {
        return Err(ServerError::BadRequest("Say which area to leave out (its key).".into()));
    }
    if reason.is_empty() {
        return Err(ServerError::BadRequest(format!(
            "Leaving out {key:?} needs a reason, written in the form."
        )));
    }
    if reason.chars().count() > MAX_TEXT {
        return Err(ServerError::BadRequest(format!("The reason is longer than {MAX_TEXT} characters.")));
    }
    if !analysis.table().keys().iter().any(|k| k == key) {
        return Err(ServerError::BadRequest(format!("No area in this analysis' table has the key {key:?}.")));
    }
    let mut spec = analysis.spec().clone();
    if spec.exclusions.iter().any(|e| e.key == key) {
        return Err(ServerError::BadRequest(format!("{key:?} is already left out of this model.")));
    }
    spec.exclusions.push(ExclusionSpec { key: key.to_owned(), reason: reason.to_owned() });
    Ok(spec)
}

/// Leaves one area out: the new analysis, named after the old one.
async fn exclude(ctx: &Ctx, analysis: &Arc<Analysis>, key: &str, reason: &str) -> Result<Arc<Analysis>> {
    let spec = with_exclusion(analysis, key, reason)?;
    let name = format!("{} without {}", analysis.name(), key.trim());
    derive_analysis(ctx.app(), analysis, spec, name).await.map_err(Refusal::into_error)
}

/// `POST /analyses/{id}/exclude`: the one-click exclusion (fields `key`, `reason`, `then`).
async fn exclude_form(State(ctx): State<Ctx>, Path(id): Path<String>, request: Request) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let fields = Fields { all: forms::read(request, FORM).await? };
    let then = then_section(fields.first("then"))?;
    let key = fields.first("key").unwrap_or("");
    let reason = fields.first("reason").unwrap_or("");
    let new = exclude(&ctx, &analysis, key, reason).await?;
    Ok(see_other_to(&section_href(new.id(), then)))
}

// ---- Saving ----

/// What the save form and `POST /api/analyses/{id}/save` take.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SaveRequest {
    /// A short title (required).
    pub title: String,
    /// The decision question the brief answers.
    #[serde(default)]
    pub question: String,
    /// Who prepared it.
    #[serde(default)]
    pub author: String,
}

/// The cross-validation settings to save: those of the model-choice search when it ran,
/// else the defaults of the Contenders page (10 folds, its default seed).
fn cv_settings(analysis: &Analysis) -> Result<CvSettings> {
    let defaults = ChoiceCv::default();
    let choice = analysis.extras()?.model_choice;
    let folds = choice.as_ref().and_then(|c| c.cv_folds).unwrap_or(defaults.folds);
    let seeds = choice.map(|c| c.cv_seeds).filter(|s| !s.is_empty()).unwrap_or_else(|| vec![defaults.seed]);
    Ok(CvSettings { folds: u32::try_from(folds).unwrap_or(u32::MAX).max(2), seeds })
}

/// Writes the analysis into the store under its own id and records the question and author.
async fn save(ctx: &Ctx, analysis: &Arc<Analysis>, request: SaveRequest) -> Result<SavedAnalysis> {
    let title = request.title.trim().to_owned();
    let question = request.question.trim().to_owned();
    let author = request.author.trim().to_owned();
    if title.is_empty() {
        return Err(ServerError::BadRequest("The saved analysis needs a title.".into()));
    }
    for (what, text) in [("title", &title), ("question", &question), ("author's name", &author)] {
        if text.chars().count() > MAX_TEXT {
            return Err(ServerError::BadRequest(format!("The {what} is longer than {MAX_TEXT} characters.")));
        }
    }
    let Some(store) = ctx.app().store().cloned() else {
        return Err(ServerError::BadRequest(
            "Saving needs a data folder: start wardcast with --data-dir, or with its default data folder."
                .into(),
        ));
    };
    let Some(dataset) = analysis.source().dataset.clone() else {
        return Err(ServerError::BadRequest(
            "This analysis' table is not kept in the data folder, so the analysis cannot be saved there."
                .into(),
        ));
    };
    let extras = analysis.extras()?;
    let allocation = match &extras.allocation {
        Some(a) => serde_json::to_value(&a.settings).map_err(|e| {
            ServerError::Internal(format!("the allocation settings could not be written: {e}"))
        })?,
        None => serde_json::Value::Null,
    };
    // Only the kept scenarios' settings are saved; restoring and briefing compute them again.
    let scenarios =
        SavedScenarios { candidates: Vec::new(), kept: super::whatif::kept_settings(&extras.scenarios) };
    let scenario = serde_json::to_value(&scenarios)
        .map_err(|e| ServerError::Internal(format!("the scenario settings could not be written: {e}")))?;
    let document = SavedAnalysis {
        schema_version: wardcast_contract::SCHEMA_VERSION.to_owned(),
        id: analysis.id().to_owned(),
        title,
        dataset_version: dataset,
        question: question.clone(),
        author: author.clone(),
        model_spec: analysis.spec().clone(),
        cv: cv_settings(analysis)?,
        scenario,
        allocation,
        created_unix: 0,
        updated_unix: 0,
    };
    let saved = blocking(move || {
        let mut store =
            store.lock().map_err(|_| ServerError::Internal("the store lock was poisoned".into()))?;
        Ok(store.save_analysis(document)?)
    })
    .await?;
    analysis.update_extras(|e| {
        e.question = Some(question).filter(|q| !q.is_empty());
        e.author = Some(author).filter(|a| !a.is_empty());
    })?;
    Ok(saved)
}

/// `POST /analyses/{id}/save`: the save form (title, question, author).
async fn save_form(State(ctx): State<Ctx>, Path(id): Path<String>, request: Request) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let fields = Fields { all: forms::read(request, FORM).await? };
    let text = |n: &str| fields.first(n).unwrap_or("").to_owned();
    save(
        &ctx,
        &analysis,
        SaveRequest { title: text("title"), question: text("question"), author: text("author") },
    )
    .await?;
    Ok(see_other_to(&format!("{}#save", section_href(analysis.id(), Section::Data))))
}

// ---- Restoring saved analyses at start-up ----

/// A source for a stored dataset version: its table, column metadata and checksum.
fn stored_source(store: &wardcast_store::Store, reference: &str) -> Result<Source> {
    let dataset = store.load(reference)?;
    let manifest = dataset.manifest();
    let mut notes: Vec<String> = manifest
        .dropped_rows
        .iter()
        .map(|d| {
            format!("Row {} ({:?}) was dropped when the table was imported: {}.", d.row, d.key, d.reason)
        })
        .collect();
    notes.extend(
        manifest
            .exclusions
            .iter()
            .map(|e| format!("The table marks {:?} as left out of models: {}.", e.key, e.reason)),
    );
    Ok(Source {
        name: manifest.name.clone(),
        table: dataset.to_engine_table()?,
        columns: manifest.columns.iter().map(|c| c.meta.clone()).collect(),
        checksums: vec![wardcast_report::brief::DatasetChecksum {
            version_id: manifest.version_id.clone(),
            checksum: manifest.checksum.clone(),
        }],
        join: None,
        notes,
        dataset: Some(manifest.version_id.clone()),
    })
}

/// Re-fits every saved analysis whose dataset version is in the store and whose id is a
/// valid analysis id, and registers it under that id, so `/analyses/{id}` survives a restart.
/// Sources already known (e.g. the demo's) are reused by their dataset reference, with their
/// glossary; other tables are read from the store and described from their metadata. Returns
/// one sentence per analysis that could not be restored. Blocking; call it from
/// `spawn_blocking` inside the runtime.
pub fn restore_saved(state: &AppState, known: &[(Arc<Source>, Glossary)]) -> Result<Vec<String>> {
    let Some(store) = state.store().cloned() else {
        return Ok(Vec::new());
    };
    let store = store.lock().map_err(|_| ServerError::Internal("the store lock was poisoned".into()))?;
    let mut sources: HashMap<String, (Arc<Source>, Glossary)> =
        known.iter().filter_map(|(s, g)| s.dataset.clone().map(|d| (d, (s.clone(), g.clone())))).collect();
    let mut skipped = Vec::new();
    for saved in store.analyses() {
        if !super::state::valid_id(&saved.id) {
            skipped
                .push(format!("the saved analysis {:?} has an id that cannot be a page address", saved.id));
            continue;
        }
        let (source, glossary) = match sources.get(&saved.dataset_version) {
            Some(known) => known.clone(),
            None => match stored_source(&store, &saved.dataset_version) {
                Ok(s) => {
                    let glossary = Glossary::from_meta("areas", &s.columns).with_steps_from(&s.table);
                    let entry = (Arc::new(s), glossary);
                    sources.insert(saved.dataset_version.clone(), entry.clone());
                    entry
                }
                Err(e) => {
                    skipped.push(format!("the saved analysis {:?} could not read its table ({e})", saved.id));
                    continue;
                }
            },
        };
        let built = Analysis::build(AnalysisParts {
            id: saved.id.clone(),
            name: saved.title.clone(),
            glossary,
            source,
            spec: saved.model_spec.clone(),
            parent: None,
        });
        match built {
            Ok(analysis) => {
                // The kept what-if scenarios are computed again from their saved settings; an
                // analysis whose settings no longer compute is restored without them.
                let scenarios =
                    match SavedScenarios::from_value(&saved.scenario).map_err(|e| e.to_string()).and_then(
                        |s| super::whatif::recompute_kept(&analysis, &s.kept).map_err(|e| e.to_string()),
                    ) {
                        Ok(docs) => docs,
                        Err(e) => {
                            skipped.push(format!(
                            "the kept scenarios of the saved analysis {:?} could not be computed again ({e})",
                            saved.id
                        ));
                            Vec::new()
                        }
                    };
                analysis.update_extras(|e| {
                    e.question = Some(saved.question.clone()).filter(|q| !q.is_empty());
                    e.author = Some(saved.author.clone()).filter(|a| !a.is_empty());
                    e.scenarios = scenarios;
                })?;
                state.insert(analysis)?;
            }
            Err(e) => skipped.push(format!("the saved analysis {:?} could not be fitted ({e})", saved.id)),
        }
    }
    Ok(skipped)
}

// ---- JSON twins ----

/// The answer to a JSON refit or exclusion.
#[derive(Debug, Serialize)]
pub struct Created {
    /// The new analysis' id.
    pub id: String,
    /// Its page.
    pub page: String,
    /// Its fit document.
    pub fit: FitDocument,
}

fn created(analysis: &Analysis) -> Response {
    let body = Created {
        id: analysis.id().to_owned(),
        page: section_href(analysis.id(), Section::Effects),
        fit: analysis.fit().clone(),
    };
    (StatusCode::CREATED, Json(body)).into_response()
}

/// `GET /api/analyses/{id}/spec`: the model spec.
async fn api_spec(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
) -> std::result::Result<Json<ModelSpec>, ApiError> {
    Ok(Json(ctx.analysis(&id)?.spec().clone()))
}

/// The body of `POST /api/analyses/{id}/refit`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RefitRequest {
    spec: ModelSpec,
    #[serde(default)]
    name: Option<String>,
}

/// `POST /api/analyses/{id}/refit`: `{spec, name?}` → 201 `{id, page, fit}`.
async fn api_refit(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    request: Request,
) -> std::result::Result<Response, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let body: RefitRequest = read_json(request).await?;
    let name = body.name.map(|n| n.trim().to_owned()).filter(|n| !n.is_empty());
    if name.as_ref().is_some_and(|n| n.chars().count() > MAX_TEXT) {
        return Err(ServerError::BadRequest(format!("The name is longer than {MAX_TEXT} characters.")).into());
    }
    let name = name.unwrap_or_else(|| format!("{}, revised", analysis.name()));
    let new = derive_analysis(ctx.app(), &analysis, body.spec, name).await.map_err(Refusal::into_error)?;
    Ok(created(&new))
}

/// The body of `POST /api/analyses/{id}/exclude`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ExcludeRequest {
    key: String,
    reason: String,
}

/// `POST /api/analyses/{id}/exclude`: `{key, reason}` → 201 `{id, page, fit}`.
async fn api_exclude(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    request: Request,
) -> std::result::Result<Response, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let body: ExcludeRequest = read_json(request).await?;
    let new = exclude(&ctx, &analysis, &body.key, &body.reason).await?;
    Ok(created(&new))
}

/// `POST /api/analyses/{id}/save`: `{title, question?, author?}` → the saved analysis.
async fn api_save(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    request: Request,
) -> std::result::Result<Json<SavedAnalysis>, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let body: SaveRequest = read_json(request).await?;
    Ok(Json(save(&ctx, &analysis, body).await?))
}

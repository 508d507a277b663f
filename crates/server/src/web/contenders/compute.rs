//! The computations behind the Contenders page: validating a search request, the background
//! search (exact best subsets, then repeated cross-validation of the best model of each size and
//! of the analyst's own model), the partial F-test between two models and the drop-one table.
//!
//! Everything here is blocking numerics; handlers call it through `blocking` or a job.

use std::collections::HashSet;

use serde::{Deserialize, Serialize};
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::selection::{DropOneDoc, ModelDoc, PartialFDoc, SelectionDocument, SelectionParts};
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::selection::{
    Candidates, CvOptions, DropOneOptions, GroupColumn, MAX_CANDIDATES, SearchOptions, best_subsets,
    cross_validate, drop_one, partial_f_test, recommend,
};
use wardcast_engine::{ColumnData, Design, QrOptions, Table};
use wardcast_report::brief::{ModelChoice, from_selection};

use super::super::jobs::JobControl;
use super::super::state::Analysis;
use crate::error::{Result, ServerError};

/// The seed of the fold generator when the analyst gives none (recorded in every result).
pub const DEFAULT_SEED: u64 = 20_240_601;
/// Models listed per size by default.
pub const DEFAULT_TOP: usize = 3;
/// Cross-validation folds by default (fewer when there are fewer rows or groups).
pub const DEFAULT_FOLDS: usize = 10;
/// Cross-validation repeats by default.
pub const DEFAULT_REPEATS: usize = 5;
/// The most models listed per size.
pub const MAX_TOP: usize = 20;
/// The most cross-validation repeats.
pub const MAX_REPEATS: usize = 50;
/// The most candidates one search accepts from the web app.
pub const MAX_WEB_CANDIDATES: usize = 40;

/// Progress steps of a search job: the subset search takes the first 800, cross-validation the
/// rest.
const STEPS: u64 = 1000;
const SEARCH_STEPS: f64 = 800.0;

fn default_top() -> usize {
    DEFAULT_TOP
}
fn default_folds() -> usize {
    DEFAULT_FOLDS
}
fn default_repeats() -> usize {
    DEFAULT_REPEATS
}
fn default_seed() -> u64 {
    DEFAULT_SEED
}

/// What the analyst asks a search to do: the JSON body of
/// `POST /api/analyses/{id}/contenders/search`, and the fields of the page's form.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SearchRequest {
    /// The candidate indicators (column names of the analysis' table).
    pub candidates: Vec<String>,
    /// Candidates every model must contain.
    #[serde(default)]
    pub forced: Vec<String>,
    /// The largest model size (terms, forced ones included); all sizes when absent.
    #[serde(default)]
    pub max_size: Option<usize>,
    /// Models listed per size.
    #[serde(default = "default_top")]
    pub top: usize,
    /// Cross-validation folds.
    #[serde(default = "default_folds")]
    pub folds: usize,
    /// Cross-validation repeats, each with fresh folds.
    #[serde(default = "default_repeats")]
    pub repeats: usize,
    /// Seed of the fold generator.
    #[serde(default = "default_seed")]
    pub seed: u64,
    /// A column whose groups are held out whole (grouped folds).
    #[serde(default)]
    pub group: Option<String>,
}

impl SearchRequest {
    /// The defaults for an analysis: its own predictors as the candidates.
    pub fn defaults_for(spec: &ModelSpec) -> Self {
        SearchRequest {
            candidates: spec.predictors.iter().map(|p| p.column.clone()).collect(),
            forced: Vec::new(),
            max_size: None,
            top: DEFAULT_TOP,
            folds: DEFAULT_FOLDS,
            repeats: DEFAULT_REPEATS,
            seed: DEFAULT_SEED,
            group: None,
        }
    }
}

/// A validated search, ready to run.
#[derive(Debug, Clone)]
pub struct Prepared {
    /// The request, with duplicates removed.
    pub request: SearchRequest,
    /// The analysis' spec with the candidates as its predictors.
    pub spec: ModelSpec,
    /// The selection input.
    pub cands: Candidates,
    /// The row keys of the rows used.
    pub keys: Vec<String>,
    /// Forced candidates, as term indices.
    pub forced: Vec<usize>,
    /// The analysis' own model as term indices, when all its predictors are candidates.
    pub own: Option<Vec<usize>>,
    /// The grouping of grouped folds.
    pub groups: Option<GroupColumn>,
    /// The response transform, for errors on the original scale.
    pub response_transform: Option<wardcast_engine::Transform>,
}

fn bad(message: impl Into<String>) -> ServerError {
    ServerError::BadRequest(message.into())
}

/// The columns an analysis may offer as candidates: every column of its table except the
/// response and the weights, numeric ones always, text ones when the model already uses them.
pub fn offerable_columns(analysis: &Analysis) -> Vec<String> {
    let spec = analysis.spec();
    analysis
        .table()
        .columns()
        .iter()
        .filter(|c| c.name != spec.response && spec.weights.as_deref() != Some(c.name.as_str()))
        .filter(|c| c.data.is_numeric() || spec.predictors.iter().any(|p| p.column == c.name))
        .map(|c| c.name.clone())
        .collect()
}

/// The text columns that can group folds.
pub fn group_columns(table: &Table) -> Vec<String> {
    table.columns().iter().filter(|c| !c.data.is_numeric()).map(|c| c.name.clone()).collect()
}

/// Checks that every name is a usable column, in the words of `what`.
fn check_columns(analysis: &Analysis, names: &[String], what: &str) -> Result<()> {
    let offer = offerable_columns(analysis);
    for n in names {
        if analysis.table().column(n).is_none() {
            return Err(bad(format!("{what} names {n:?}, which is not a column of this table.")));
        }
        if !offer.contains(n) {
            return Err(bad(format!(
                "{what} names {n:?}, which cannot be a candidate: it is the response, the weights, or a text \
                 column the model does not use."
            )));
        }
    }
    Ok(())
}

fn dedupe(names: &[String]) -> Vec<String> {
    let mut seen = HashSet::new();
    names.iter().map(|n| n.trim().to_owned()).filter(|n| !n.is_empty() && seen.insert(n.clone())).collect()
}

/// Validates a request against an analysis and builds the selection input. Blocking (the
/// design is built).
///
/// # Errors
/// A bad request (400) for an option out of range or an unknown column; the engine's error
/// (422) when the design cannot be built.
pub fn prepare(analysis: &Analysis, request: SearchRequest) -> Result<Prepared> {
    let mut request = request;
    request.candidates = dedupe(&request.candidates);
    request.forced = dedupe(&request.forced);
    if request.candidates.is_empty() {
        return Err(bad("Choose at least one candidate indicator to search over."));
    }
    if request.candidates.len() > MAX_WEB_CANDIDATES.min(MAX_CANDIDATES) {
        return Err(bad(format!(
            "A search takes at most {MAX_WEB_CANDIDATES} candidates; {} were chosen.",
            request.candidates.len()
        )));
    }
    check_columns(analysis, &request.candidates, "The candidate list")?;
    if let Some(f) = request.forced.iter().find(|f| !request.candidates.contains(f)) {
        return Err(bad(format!("The forced term {f:?} is not among the chosen candidates.")));
    }
    if request.max_size == Some(0) {
        return Err(bad("The largest model size must be at least 1."));
    }
    if let Some(m) = request.max_size
        && m < request.forced.len()
    {
        return Err(bad(format!(
            "The largest model size ({m}) is smaller than the number of forced terms ({}).",
            request.forced.len()
        )));
    }
    if request.top == 0 || request.top > MAX_TOP {
        return Err(bad(format!("Models listed per size must be between 1 and {MAX_TOP}.")));
    }
    if request.folds < 2 {
        return Err(bad("Cross-validation needs at least 2 folds."));
    }
    if request.repeats == 0 || request.repeats > MAX_REPEATS {
        return Err(bad(format!("Cross-validation repeats must be between 1 and {MAX_REPEATS}.")));
    }

    let spec = analysis.spec().with_predictor_columns(&request.candidates);
    let engine_spec = spec.to_engine()?;
    let design = Design::build(analysis.table(), &engine_spec)?;
    let cands = Candidates::from_design(&design)?;
    let keys = design.keys().to_vec();
    if request.folds > keys.len() {
        return Err(bad(format!(
            "Cross-validation cannot use {} folds on {} rows.",
            request.folds,
            keys.len()
        )));
    }
    let index = |c: &String| request.candidates.iter().position(|x| x == c);
    let forced: Vec<usize> = request.forced.iter().filter_map(index).collect();
    let own_columns: Vec<String> = analysis.spec().predictors.iter().map(|p| p.column.clone()).collect();
    let own = own_columns.iter().map(index).collect::<Option<Vec<usize>>>();
    let groups = match request.group.as_deref().map(str::trim).filter(|g| !g.is_empty()) {
        Some(g) => {
            let column = group_column(analysis.table(), &keys, g)?;
            let distinct = column.values.iter().collect::<HashSet<_>>().len();
            if distinct < request.folds {
                return Err(bad(format!(
                    "Grouped folds need at least as many groups as folds: {g:?} has {distinct} groups, {} folds \
                     were asked for.",
                    request.folds
                )));
            }
            Some(column)
        }
        None => None,
    };
    request.group = groups.as_ref().map(|g| g.label.clone());
    Ok(Prepared {
        request,
        spec,
        cands,
        keys,
        forced,
        own,
        groups,
        response_transform: engine_spec.response_transform,
    })
}

/// The grouping column's values for the rows used.
fn group_column(table: &Table, keys: &[String], name: &str) -> Result<GroupColumn> {
    let column = table
        .column(name)
        .ok_or_else(|| bad(format!("The group column {name:?} is not a column of this table.")))?;
    let text: Vec<Option<String>> = match &column.data {
        ColumnData::Text(v) => v.clone(),
        ColumnData::Numeric(v) => v.iter().map(|x| x.map(|x| x.to_string())).collect(),
    };
    let row: std::collections::HashMap<&str, usize> =
        table.keys().iter().enumerate().map(|(i, k)| (k.as_str(), i)).collect();
    let values = keys
        .iter()
        .map(|k| {
            row.get(k.as_str())
                .and_then(|&i| text[i].clone())
                .ok_or_else(|| bad(format!("The group column {name:?} is empty for {k:?}.")))
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(GroupColumn { label: name.to_owned(), values })
}

/// What a finished search job returns (the `result` of its job document).
#[derive(Debug, Clone, Serialize)]
pub struct ContendersResult {
    /// Always `contenders`.
    pub kind: &'static str,
    /// The analysis searched.
    pub analysis: String,
    /// The settings used, seed included.
    pub settings: SearchRequest,
    /// The column behind each candidate term, in the order of `selection.candidates`.
    pub candidate_columns: Vec<String>,
    /// The analysis' own model as the search would report it; absent when its predictors are
    /// not all among the candidates.
    pub own_model: Option<ModelDoc>,
    /// The selection document, as `wardcast select` writes it.
    pub selection: SelectionDocument,
    /// The brief's view of the comparison, also stored on the analysis.
    pub model_choice: ModelChoice,
}

/// The cross-validation options of a prepared search.
fn cv_options<'a>(p: &Prepared) -> CvOptions<'a> {
    CvOptions {
        folds: p.request.folds,
        repeats: p.request.repeats,
        seed: p.request.seed,
        groups: p.groups.clone(),
        response_transform: p.response_transform,
        ..CvOptions::default()
    }
}

fn sorted(v: &[usize]) -> Vec<usize> {
    let mut v = v.to_vec();
    v.sort_unstable();
    v
}

/// Runs a prepared search: best subsets, the own model's statistics, cross-validation of the
/// best model of each size and of the own model, the recommendation, partial F-tests of each of
/// those against the model with every candidate, and the drop-one table of the own model.
///
/// # Errors
/// The engine's message; a cancelled run returns an error after the flag was raised.
pub fn run(analysis: &str, p: &Prepared, ctl: &JobControl) -> std::result::Result<ContendersResult, String> {
    let text = |e: wardcast_engine::EngineError| e.to_string();
    let search_progress = |f: f64| ctl.progress((f.clamp(0.0, 1.0) * SEARCH_STEPS) as u64, STEPS);
    let search = best_subsets(
        &p.cands,
        &SearchOptions {
            top: p.request.top,
            max_size: p.request.max_size,
            forced: p.forced.clone(),
            progress: Some(&search_progress),
            cancel: Some(ctl.cancel_flag().as_ref()),
            ..SearchOptions::default()
        },
    )
    .map_err(text)?;

    // The own model's statistics on the same rows, from a search that forces exactly its terms.
    let own_model = match &p.own {
        Some(own) => {
            let one = best_subsets(
                &p.cands,
                &SearchOptions {
                    top: 1,
                    max_size: Some(own.len()),
                    forced: own.clone(),
                    cancel: Some(ctl.cancel_flag().as_ref()),
                    ..SearchOptions::default()
                },
            )
            .map_err(text)?;
            let doc = SelectionDocument::new(&p.spec, &one, &p.keys, SelectionParts::default());
            doc.sizes.iter().find(|s| s.size == own.len()).and_then(|s| s.models.first().cloned())
        }
        None => None,
    };

    let mut models: Vec<Vec<usize>> =
        search.sizes().iter().filter_map(|s| s.models().first().map(|m| m.terms().to_vec())).collect();
    if let (Some(own), Some(_)) = (&p.own, &own_model)
        && !models.iter().any(|m| sorted(m) == sorted(own))
    {
        models.push(own.clone());
    }
    let cv_progress = |f: f64| {
        ctl.progress(SEARCH_STEPS as u64 + (f.clamp(0.0, 1.0) * (STEPS as f64 - SEARCH_STEPS)) as u64, STEPS)
    };
    let cv = cross_validate(
        &p.cands,
        &models,
        &CvOptions {
            progress: Some(&cv_progress),
            cancel: Some(ctl.cancel_flag().as_ref()),
            ..cv_options(p)
        },
    )
    .map_err(text)?;
    let recommendation = recommend(&search, Some(&cv));
    let all: Vec<usize> = (0..p.cands.terms().len()).collect();
    let qr = QrOptions::default();
    let comparisons: Vec<_> = models
        .iter()
        .filter(|m| m.len() < all.len())
        .filter_map(|m| partial_f_test(&p.cands, m, &all, &qr).ok())
        .collect();
    let dropped = match &p.own {
        Some(own) if !own.is_empty() && own_model.is_some() => {
            drop_one(&p.cands, own, &DropOneOptions { qr, cv: Some(cv_options(p)) }).ok()
        }
        _ => None,
    };
    if ctl.cancelled() {
        return Err("cancelled".into());
    }
    let selection = SelectionDocument::new(
        &p.spec,
        &search,
        &p.keys,
        SelectionParts {
            cv: Some(&cv),
            recommendation: Some(&recommendation),
            comparisons: &comparisons,
            drop_one: dropped.as_ref(),
        },
    );
    let model_choice = from_selection(&selection, own_model.as_ref());
    ctl.progress(STEPS, STEPS);
    Ok(ContendersResult {
        kind: "contenders",
        analysis: analysis.to_owned(),
        settings: p.request.clone(),
        candidate_columns: p.request.candidates.clone(),
        own_model,
        selection,
        model_choice,
    })
}

/// The JSON answer of `GET /api/analyses/{id}/contenders/compare`.
#[derive(Debug, Clone, Serialize)]
pub struct CompareDocument {
    /// Schema version.
    pub schema_version: &'static str,
    /// Always `partial_f`.
    pub kind: &'static str,
    /// The analysis.
    pub analysis: String,
    /// The candidate columns whose complete rows were used.
    pub candidates: Vec<String>,
    /// Rows used.
    pub rows_used: usize,
    /// The test.
    pub test: PartialFDoc,
}

/// Splits a comma-separated list of columns; an empty text is the model without indicators.
pub fn column_list(text: &str) -> Vec<String> {
    dedupe(&text.split(',').map(str::to_owned).collect::<Vec<_>>())
}

/// The partial F-test between the models made of `a` and `b` (column names), on the complete
/// rows of `within` (the union of both when empty).
///
/// # Errors
/// A bad request for an unknown column or one outside `within`; the engine's error (422) for
/// models that are not nested.
pub fn compare(
    analysis: &Analysis,
    a: &[String],
    b: &[String],
    within: &[String],
) -> Result<CompareDocument> {
    let union: Vec<String> = if within.is_empty() {
        dedupe(&a.iter().chain(b).cloned().collect::<Vec<_>>())
    } else {
        within.to_vec()
    };
    check_columns(analysis, &union, "The comparison")?;
    for c in a.iter().chain(b) {
        if !union.contains(c) {
            return Err(bad(format!("{c:?} was not among the candidates of this search.")));
        }
    }
    let spec = analysis.spec().with_predictor_columns(&union);
    let design = Design::build(analysis.table(), &spec.to_engine()?)?;
    let cands = Candidates::from_design(&design)?;
    let idx =
        |list: &[String]| list.iter().filter_map(|c| union.iter().position(|u| u == c)).collect::<Vec<_>>();
    let test = partial_f_test(&cands, &idx(a), &idx(b), &QrOptions::default())?;
    Ok(CompareDocument {
        schema_version: SCHEMA_VERSION,
        kind: "partial_f",
        analysis: analysis.id().to_owned(),
        candidates: union,
        rows_used: cands.nrows(),
        test: PartialFDoc::from(&test),
    })
}

/// Cross-validation settings of the drop-one table.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct DropCv {
    /// Folds.
    pub folds: usize,
    /// Repeats.
    pub repeats: usize,
    /// Seed.
    pub seed: u64,
}

/// The JSON answer of `GET /api/analyses/{id}/contenders/drop-one`.
#[derive(Debug, Clone, Serialize)]
pub struct DropOneDocument {
    /// Schema version.
    pub schema_version: &'static str,
    /// Always `drop_one`.
    pub kind: &'static str,
    /// The analysis.
    pub analysis: String,
    /// Rows used (those of the analysis' fit).
    pub rows_used: usize,
    /// The cross-validation behind the RMSE column.
    pub cross_validation: DropCv,
    /// The table.
    pub table: DropOneDoc,
}

/// The drop-one table of the analysis' own model, with cross-validated RMSE on the same folds.
///
/// # Errors
/// A bad request for fewer than 2 folds or no repeat; the engine's error (422) otherwise, e.g.
/// for a model without indicators.
pub fn drop_one_table(analysis: &Analysis, cv: DropCv) -> Result<DropOneDocument> {
    if cv.folds < 2 {
        return Err(bad("Cross-validation needs at least 2 folds."));
    }
    if cv.repeats == 0 || cv.repeats > MAX_REPEATS {
        return Err(bad(format!("Cross-validation repeats must be between 1 and {MAX_REPEATS}.")));
    }
    let engine_spec = analysis.spec().to_engine()?;
    let design = Design::build(analysis.table(), &engine_spec)?;
    let cands = Candidates::from_design(&design)?;
    let folds = cv.folds.min(cands.nrows());
    let terms: Vec<usize> = (0..cands.terms().len()).collect();
    let options = DropOneOptions {
        qr: QrOptions::default(),
        cv: Some(CvOptions {
            folds,
            repeats: cv.repeats,
            seed: cv.seed,
            response_transform: engine_spec.response_transform,
            ..CvOptions::default()
        }),
    };
    let table = drop_one(&cands, &terms, &options)?;
    Ok(DropOneDocument {
        schema_version: SCHEMA_VERSION,
        kind: "drop_one",
        analysis: analysis.id().to_owned(),
        rows_used: cands.nrows(),
        cross_validation: DropCv { folds, ..cv },
        table: DropOneDoc::from(&table),
    })
}

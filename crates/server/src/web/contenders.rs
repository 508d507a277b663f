//! The Contenders page: best subsets, cross-validated comparison, nested F tests and the drop-one table.
//!
//! | Method | Path                                         | What                                          |
//! |--------|----------------------------------------------|-----------------------------------------------|
//! | GET    | `/analyses/{id}/contenders`                  | the page; `?job=…` shows a search's result, `&a=…&b=…` a partial F-test |
//! | POST   | `/analyses/{id}/contenders/search`           | starts a search job; 303 to `/jobs/{job}`     |
//! | POST   | `/api/analyses/{id}/contenders/search`       | the same from JSON options; 202 with the job document |
//! | GET    | `/api/analyses/{id}/contenders/drop-one`     | the drop-one table of the analysis' model     |
//! | GET    | `/api/analyses/{id}/contenders/compare`      | the partial F-test between two models         |
//!
//! A search runs as a background job (see [`super::jobs`]): the exact subset search reports its
//! progress and watches the cancel flag, then the best model of each size and the analysis' own
//! model are cross-validated on the same seeded folds. When it finishes, the brief's view of the
//! comparison is stored on the analysis, with the analysis' own model marked as chosen.

pub mod compute;

use std::sync::Arc;

use askama::Template;
use axum::Json;
use axum::Router;
use axum::body::Bytes;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Path, Query, Request, State};
use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use wardcast_contract::numbers::Number;
use wardcast_contract::selection::{CvModelDoc, ModelDoc, SelectionDocument};
use wardcast_report::svg::{Axis, Callout, Chart, LinePlot, LineSeries, XTicks};

use self::compute::{CompareDocument, ContendersResult, DropCv, DropOneDocument, SearchRequest};
use super::effects::Figure;
use super::forms::{self, FormReading};
use super::jobs::{self, Finished, Job, JobSpec, JobState};
use super::pages::{Layout, Section, render};
use super::state::Analysis;
use super::words::{fmt_num, fmt_p};
use super::{Ctx, blocking};
use crate::error::{ApiError, Result, ServerError};

/// The routes of this page.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
        .route("/analyses/{id}/contenders", get(page))
        .route("/analyses/{id}/contenders/search", post(form_search))
        .route("/api/analyses/{id}/contenders/search", post(api_search))
        .route("/api/analyses/{id}/contenders/drop-one", get(api_drop_one))
        .route("/api/analyses/{id}/contenders/compare", get(api_compare))
}

fn figure(x: f64) -> Figure {
    Figure { text: fmt_num(x), raw: if x.is_finite() { format!("{x:?}") } else { String::new() } }
}

fn figure_of(n: Number) -> Figure {
    match n {
        Number::Finite(x) => figure(x),
        Number::PosInfinity => Figure { text: "infinite".into(), raw: "Infinity".into() },
        Number::NegInfinity => Figure { text: "minus infinite".into(), raw: "-Infinity".into() },
        Number::Undefined => Figure { text: "undefined".into(), raw: String::new() },
    }
}

/// A model's terms in words.
fn terms_text(terms: &[String]) -> String {
    if terms.is_empty() { "no indicators (the average alone)".to_owned() } else { terms.join(", ") }
}

fn same_terms(a: &[String], b: &[String]) -> bool {
    let mut a = a.to_vec();
    let mut b = b.to_vec();
    a.sort_unstable();
    b.sort_unstable();
    a == b
}

/// One candidate column in the search form.
#[derive(Debug, Clone)]
pub struct ColumnChoice {
    /// The column name (user data; escaped on output).
    pub name: String,
    /// Whether the analysis' model uses it (preselected).
    pub in_model: bool,
    /// Whether it is ticked as a candidate.
    pub checked: bool,
}

/// The search form, with its defaults.
#[derive(Debug, Clone)]
pub struct SearchForm {
    /// Candidate columns.
    pub columns: Vec<ColumnChoice>,
    /// Models per size.
    pub top: usize,
    /// Folds.
    pub folds: usize,
    /// Repeats.
    pub repeats: usize,
    /// Seed.
    pub seed: u64,
    /// Columns that can group folds.
    pub groups: Vec<String>,
}

/// One listed model.
#[derive(Debug, Clone)]
pub struct ModelRow {
    /// Number of terms.
    pub size: usize,
    /// Position within its size ("—" for the own model listed separately).
    pub rank: String,
    /// The terms in words.
    pub terms: String,
    /// The columns, comma-separated, for the comparison form.
    pub columns: String,
    /// Whether it is the analysis' own model.
    pub own: bool,
    /// Whether it is the own model shown although outside the top of its size.
    pub extra: bool,
    /// SSE.
    pub sse: Figure,
    /// R².
    pub r2: Figure,
    /// Adjusted R².
    pub adj: Figure,
    /// Mallows' Cp.
    pub cp: Figure,
    /// AIC.
    pub aic: Figure,
    /// SBC.
    pub sbc: Figure,
    /// PRESS.
    pub press: Figure,
    /// Cross-validated RMSE mean and sd, when cross-validated.
    pub cv: Option<(Figure, Figure)>,
}

/// One criterion's favourite.
#[derive(Debug, Clone)]
pub struct PickRow {
    /// The criterion in words.
    pub criterion: String,
    /// The model in words.
    pub terms: String,
    /// Its size.
    pub size: usize,
    /// The criterion's value.
    pub value: Figure,
}

/// One cross-validated model.
#[derive(Debug, Clone)]
pub struct CvRow {
    /// The terms in words.
    pub terms: String,
    /// Whether it is the own model.
    pub own: bool,
    /// RMSE mean.
    pub rmse: Figure,
    /// RMSE sd.
    pub rmse_sd: Figure,
    /// MAE mean.
    pub mae: Figure,
    /// Out-of-sample R² mean.
    pub r2: Figure,
}

/// The result of a finished search, as the page shows it.
#[derive(Debug, Clone)]
pub struct ResultView {
    /// The job id.
    pub job: String,
    /// What was searched, in words.
    pub settings: String,
    /// The recommendation, paragraph by paragraph.
    pub explanation: Vec<String>,
    /// Each criterion's pick.
    pub picks: Vec<PickRow>,
    /// The Cp reference, in words.
    pub cp_reference: String,
    /// The models, size by size.
    pub rows: Vec<ModelRow>,
    /// Where the own model stands, in words.
    pub own_note: String,
    /// The criterion charts: inline SVG from the report crate, and a caption saying which
    /// direction is better.
    pub charts: Vec<(String, String)>,
    /// The cross-validated models.
    pub cv_rows: Vec<CvRow>,
    /// How the cross-validation was run, in words.
    pub cv_text: String,
    /// Notes from the engine.
    pub notes: Vec<String>,
    /// Models offered in the comparison form: (columns, label).
    pub choices: Vec<(String, String)>,
    /// Whether the brief's model choice was updated from this search.
    pub stored: bool,
}

/// A partial F-test shown on the page.
#[derive(Debug, Clone)]
pub struct CompareView {
    /// The smaller model in words.
    pub smaller: String,
    /// The larger model in words.
    pub larger: String,
    /// The added terms in words.
    pub added: String,
    /// SSE of each.
    pub sse_smaller: Figure,
    /// SSE of the larger model.
    pub sse_larger: Figure,
    /// F.
    pub f: Figure,
    /// Numerator df.
    pub df_num: usize,
    /// Denominator df.
    pub df_den: usize,
    /// The p-value in words.
    pub p_text: String,
    /// The reading in words.
    pub reading: String,
    /// Rows used.
    pub rows_used: usize,
}

/// A drop-one row.
#[derive(Debug, Clone)]
pub struct DropRow {
    /// The term.
    pub term: String,
    /// Its coefficients.
    pub df: usize,
    /// Extra SS.
    pub extra_ss: Figure,
    /// F.
    pub f: Figure,
    /// p in words.
    pub p_text: String,
    /// Change in adjusted R².
    pub d_adj: Figure,
    /// Change in AIC.
    pub d_aic: Figure,
    /// Change in CV RMSE.
    pub d_cv: Figure,
}

/// An earlier job of the analysis.
#[derive(Debug, Clone)]
pub struct JobRow {
    /// The id.
    pub id: String,
    /// What it computed.
    pub title: String,
    /// Its state in words.
    pub state: &'static str,
    /// The result page when done.
    pub result: Option<String>,
}

/// The Contenders page.
#[derive(Debug, Template)]
#[template(path = "contenders.html")]
pub struct ContendersPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id.
    pub id: String,
    /// The opening line.
    pub lede: String,
    /// The search form.
    pub form: SearchForm,
    /// A finished search's result.
    pub result: Option<ResultView>,
    /// Why a requested result cannot be shown (job running, cancelled, unknown).
    pub result_message: Option<String>,
    /// The job the result belongs to, for links.
    pub job_link: Option<String>,
    /// A requested partial F-test.
    pub compare: Option<CompareView>,
    /// Why the requested test could not be made.
    pub compare_error: Option<String>,
    /// The comparison form's current lists, for the free-text form.
    pub compare_a: String,
    /// The second list.
    pub compare_b: String,
    /// The drop-one table rows.
    pub drop_rows: Vec<DropRow>,
    /// The drop-one cross-validation in words, or why the table is missing.
    pub drop_text: String,
    /// Earlier jobs.
    pub jobs: Vec<JobRow>,
}

fn job_rows(ctx: &Ctx, id: &str) -> Result<Vec<JobRow>> {
    Ok(ctx
        .app()
        .jobs()
        .of_analysis(id)?
        .iter()
        .map(|j| {
            let (state, result) = match j.state() {
                JobState::Running => ("running", None),
                JobState::Done { .. } => ("finished", Some(j.result_href().to_owned())),
                JobState::Cancelled => ("cancelled", None),
                JobState::Failed(_) => ("stopped with an error", None),
            };
            JobRow { id: j.id().to_owned(), title: j.title().to_owned(), state, result }
        })
        .collect())
}

fn search_form(analysis: &Analysis) -> SearchForm {
    let own: Vec<&str> = analysis.spec().predictors.iter().map(|p| p.column.as_str()).collect();
    SearchForm {
        columns: compute::offerable_columns(analysis)
            .into_iter()
            .map(|name| {
                let in_model = own.contains(&name.as_str());
                ColumnChoice { name, in_model, checked: in_model }
            })
            .collect(),
        top: compute::DEFAULT_TOP,
        folds: compute::DEFAULT_FOLDS,
        repeats: compute::DEFAULT_REPEATS,
        seed: compute::DEFAULT_SEED,
        groups: compute::group_columns(analysis.table()),
    }
}

/// The column list of a model's term labels.
fn columns_of(result: &ContendersResult, terms: &[String]) -> String {
    terms
        .iter()
        .filter_map(|t| result.selection.candidates.iter().position(|c| c == t))
        .filter_map(|i| result.candidate_columns.get(i).cloned())
        .collect::<Vec<_>>()
        .join(",")
}

fn cv_of<'a>(doc: &'a SelectionDocument, terms: &[String]) -> Option<&'a CvModelDoc> {
    doc.cross_validation.as_ref().and_then(|cv| cv.models.iter().find(|m| same_terms(&m.terms, terms)))
}

fn model_row(result: &ContendersResult, m: &ModelDoc, size: usize, rank: String, extra: bool) -> ModelRow {
    let own = result.own_model.as_ref().is_some_and(|o| same_terms(&o.terms, &m.terms));
    ModelRow {
        size,
        rank,
        terms: terms_text(&m.terms),
        columns: columns_of(result, &m.terms),
        own,
        extra,
        sse: figure(m.sse),
        r2: figure(m.r_squared),
        adj: figure(m.adj_r_squared),
        cp: figure_of(m.cp),
        aic: figure_of(m.aic),
        sbc: figure_of(m.sbc),
        press: figure_of(m.press),
        cv: cv_of(&result.selection, &m.terms).map(|c| (figure(c.rmse.mean), figure(c.rmse.sd))),
    }
}

/// One small chart per criterion: its value for the best model of each size, the model each
/// criterion prefers ringed.
fn criterion_charts(result: &ContendersResult, analysis: &Analysis) -> Vec<(String, String)> {
    let doc = &result.selection;
    let best: Vec<(usize, &ModelDoc)> =
        doc.sizes.iter().filter_map(|s| s.models.first().map(|m| (s.size, m))).collect();
    let unit = analysis.glossary().column(&analysis.spec().response).unit.unwrap_or_default();
    type Get = fn(&ModelDoc) -> Option<f64>;
    let criteria: [(&str, &str, &str, Get, &str); 5] = [
        ("adj_r_squared", "Adjusted R²", "", |m| Some(m.adj_r_squared), "higher is better"),
        ("cp", "Mallows' Cp", "", |m| m.cp.as_f64(), "near the number of coefficients, and low, is better"),
        ("aic", "AIC", "", |m| m.aic.as_f64(), "lower is better"),
        ("sbc", "SBC", "", |m| m.sbc.as_f64(), "lower is better"),
        ("press", "PRESS", "", |m| m.press.as_f64(), "lower is better"),
    ];
    let pick = |id: &str| {
        doc.recommendation
            .as_ref()
            .and_then(|r| r.picks.iter().find(|p| p.criterion == id))
            .map(|p| Callout { x: p.size as f64, y: p.value, label: format!("preferred: size {}", p.size) })
    };
    let mut charts = Vec::new();
    for (id, name, y_unit, get, direction) in criteria {
        let points: Vec<(f64, f64)> =
            best.iter().map(|(s, m)| (*s as f64, get(m).unwrap_or(f64::NAN))).collect();
        let mut series = vec![LineSeries { name: "best model of each size".into(), points }];
        if id == "cp" {
            series.push(LineSeries {
                name: "the number of coefficients".into(),
                points: best.iter().map(|(s, m)| (*s as f64, m.params as f64)).collect(),
            });
        }
        let caption = format!("{name}: {direction}.");
        charts.push((
            caption,
            LinePlot {
                title: format!("{name} by model size"),
                x_axis: Axis::new("Indicators in the model", ""),
                y_axis: Axis::new(name, y_unit),
                series,
                x_ticks: XTicks::Integers,
                callouts: pick(id).into_iter().collect(),
                summary: format!("{name} of the best model of each size; {direction}."),
            },
        ));
    }
    let cv_points: Vec<(f64, f64)> =
        best.iter().filter_map(|(s, m)| cv_of(doc, &m.terms).map(|c| (*s as f64, c.rmse.mean))).collect();
    if !cv_points.is_empty() {
        charts.push((
            "Cross-validated RMSE: lower is better; it is measured on areas each model was not fitted to."
                .to_owned(),
            LinePlot {
                title: "Cross-validated prediction error by model size".into(),
                x_axis: Axis::new("Indicators in the model", ""),
                y_axis: Axis::new("RMSE", unit),
                series: vec![LineSeries { name: "best model of each size".into(), points: cv_points }],
                x_ticks: XTicks::Integers,
                callouts: pick("cv_rmse").into_iter().collect(),
                summary: "Mean root mean squared prediction error over the repeats, on held-out areas."
                    .into(),
            },
        ));
    }
    charts
        .into_iter()
        .filter_map(|(caption, c)| match c.render() {
            Ok(svg) => Some((svg, caption)),
            Err(e) => {
                tracing::warn!(error = %e, "a criterion chart could not be drawn");
                None
            }
        })
        .collect()
}

fn result_view(job: &Job, result: &ContendersResult, analysis: &Analysis) -> ResultView {
    let doc = &result.selection;
    let s = &result.settings;
    let areas = analysis.glossary().areas();
    let mut rows = Vec::new();
    for size in &doc.sizes {
        for m in &size.models {
            rows.push(model_row(result, m, size.size, m.rank.to_string(), false));
        }
    }
    let own_listed = rows.iter().any(|r| r.own);
    let own_note = match &result.own_model {
        Some(own) if own_listed => format!(
            "The analysis' own model ({}) is marked in the table; the brief reports it as the chosen model.",
            terms_text(&own.terms)
        ),
        Some(own) => {
            rows.push(model_row(result, own, own.terms.len(), "—".into(), true));
            format!(
                "The analysis' own model ({}) is not among the {} best of its size; it is added at the end of the \
                 table for comparison, and the brief reports it as the chosen model.",
                terms_text(&own.terms),
                s.top
            )
        }
        None => {
            "The analysis' own model is not made of these candidates, so it is not compared here and the \
                 brief's account of the model choice was not changed."
                .to_owned()
        }
    };
    let mut choices: Vec<(String, String)> = Vec::new();
    for r in &rows {
        if !choices.iter().any(|(c, _)| c == &r.columns) {
            let tag = if r.own { ", your model" } else { "" };
            choices.push((r.columns.clone(), format!("{} (size {}{tag})", r.terms, r.size)));
        }
    }
    let cp = &doc.cp_reference;
    let cp_reference = format!(
        "Cp is scaled by the residual mean square of the model with {} ({} on {} residual degrees of freedom).{}",
        terms_text(&cp.terms),
        figure_of(cp.mse).text,
        cp.df_residual,
        cp.note.as_deref().map(|n| format!(" {n}")).unwrap_or_default()
    );
    let forced =
        if s.forced.is_empty() { String::new() } else { format!(", {} in every model", s.forced.join(", ")) };
    let settings = format!(
        "Exact best subsets ({}) of {} candidate indicators{forced}, the {} best models of each size{}, on {} {areas}.",
        if doc.method == "leaps_and_bounds" { "leaps and bounds" } else { "every subset computed" },
        doc.candidates.len(),
        s.top,
        s.max_size.map(|m| format!(" up to size {m}")).unwrap_or_default(),
        doc.rows_used
    );
    let (cv_rows, cv_text) = match &doc.cross_validation {
        Some(cv) => (
            cv.models
                .iter()
                .map(|m| CvRow {
                    terms: terms_text(&m.terms),
                    own: result.own_model.as_ref().is_some_and(|o| same_terms(&o.terms, &m.terms)),
                    rmse: figure(m.rmse.mean),
                    rmse_sd: figure(m.rmse.sd),
                    mae: figure(m.mae.mean),
                    r2: figure(m.r_squared.mean),
                })
                .collect(),
            format!(
                "{}-fold cross-validation repeated {} times with seed {}{}: every model is trained and tested on the \
                 same folds, and errors are measured on the original scale of the response.",
                cv.folds,
                cv.repeats,
                cv.seed,
                cv.grouped_by
                    .as_deref()
                    .map(|g| format!(", whole groups of {g} held out together"))
                    .unwrap_or_default()
            ),
        ),
        None => (Vec::new(), String::new()),
    };
    let (explanation, picks) = match &doc.recommendation {
        Some(r) => (
            r.explanation.clone(),
            r.picks
                .iter()
                .map(|p| PickRow {
                    criterion: p.criterion_name.clone(),
                    terms: terms_text(&p.terms),
                    size: p.size,
                    value: figure(p.value),
                })
                .collect(),
        ),
        None => (Vec::new(), Vec::new()),
    };
    ResultView {
        job: job.id().to_owned(),
        settings,
        explanation,
        picks,
        cp_reference,
        rows,
        own_note,
        charts: criterion_charts(result, analysis),
        cv_rows,
        cv_text,
        notes: doc.notes.clone(),
        choices,
        stored: result.own_model.is_some(),
    }
}

fn compare_view(doc: &CompareDocument) -> CompareView {
    let t = &doc.test;
    let p = t.p_value.as_f64();
    let reading = match p {
        Some(p) if p < 0.05 => format!(
            "The model with {} leaves less unexplained variation than the smaller model, by more than chance \
             alone would usually produce. This is a statement about fit across these areas, not about what the \
             indicators do.",
            t.added.join(", ")
        ),
        Some(_) => format!(
            "The model with {} leaves less unexplained variation than the smaller model only by an amount chance \
             alone could plausibly produce, so the smaller model describes these areas about as well.",
            t.added.join(", ")
        ),
        None => "The test is undefined here; see the figures.".to_owned(),
    };
    CompareView {
        smaller: terms_text(&t.smaller),
        larger: terms_text(&t.larger),
        added: t.added.join(", "),
        sse_smaller: figure(t.sse_smaller),
        sse_larger: figure(t.sse_larger),
        f: figure_of(t.f),
        df_num: t.df_numerator,
        df_den: t.df_denominator,
        p_text: fmt_p(p),
        reading,
        rows_used: doc.rows_used,
    }
}

fn drop_rows(doc: &DropOneDocument) -> Vec<DropRow> {
    doc.table
        .rows
        .iter()
        .map(|r| DropRow {
            term: r.term.clone(),
            df: r.df,
            extra_ss: figure(r.extra_ss),
            f: figure_of(r.f),
            p_text: fmt_p(r.p_value.as_f64()),
            d_adj: figure(r.delta_adj_r_squared),
            d_aic: figure_of(r.delta_aic),
            d_cv: figure_of(r.delta_cv_rmse),
        })
        .collect()
}

fn default_drop_cv() -> DropCv {
    DropCv { folds: compute::DEFAULT_FOLDS, repeats: compute::DEFAULT_REPEATS, seed: compute::DEFAULT_SEED }
}

/// The finished contenders result of a job of this analysis, or why there is none.
fn job_result(
    ctx: &Ctx,
    analysis: &Analysis,
    job_id: &str,
) -> Result<(Arc<Job>, Finished<ContendersResult>)> {
    jobs::finished(
        ctx,
        analysis.id(),
        job_id,
        "This job is not a subset search, so its result is shown on its own page.",
    )
}

/// `GET /analyses/{id}/contenders`.
async fn page(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    query: std::result::Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> Result<Response> {
    let Query(pairs) =
        query.map_err(|_| ServerError::BadRequest("The address has a malformed query.".into()))?;
    let analysis = ctx.analysis(&id)?;
    let mut result = None;
    let mut result_message = None;
    let mut job_link = None;
    let mut within: Vec<String> = Vec::new();
    if let Some(job_id) = forms::last(&pairs, "job").filter(|j| !j.is_empty()) {
        let (job, outcome) = job_result(&ctx, &analysis, job_id)?;
        job_link = Some(format!("/jobs/{}", job.id()));
        match outcome {
            Ok(r) => {
                within = r.candidate_columns.clone();
                result = Some(result_view(&job, &r, &analysis));
            }
            Err(message) => result_message = Some(message),
        }
    }
    let compare_a = forms::last(&pairs, "a").unwrap_or_default().to_owned();
    let compare_b = forms::last(&pairs, "b").unwrap_or_default().to_owned();
    let wants_compare = forms::last(&pairs, "a").is_some() || forms::last(&pairs, "b").is_some();
    let a2 = analysis.clone();
    let (ca, cb) = (compute::column_list(&compare_a), compute::column_list(&compare_b));
    let (compared, dropped) = blocking(move || {
        let compared = wants_compare.then(|| compute::compare(&a2, &ca, &cb, &within));
        Ok((compared, compute::drop_one_table(&a2, default_drop_cv())))
    })
    .await?;
    let mut status = StatusCode::OK;
    let (compare, compare_error) = match compared {
        None => (None, None),
        Some(Ok(doc)) => (Some(compare_view(&doc)), None),
        Some(Err(e)) => {
            status = e.status();
            if status.is_server_error() {
                return Err(e);
            }
            (None, Some(e.to_string()))
        }
    };
    let (drop_rows, drop_text) = match dropped {
        Ok(doc) => (
            drop_rows(&doc),
            format!(
                "Each row refits the model without one term, on the same {} {}. The change in cross-validated RMSE \
                 uses {}-fold cross-validation repeated {} times with seed {}.",
                doc.rows_used,
                analysis.glossary().areas(),
                doc.cross_validation.folds,
                doc.cross_validation.repeats,
                doc.cross_validation.seed
            ),
        ),
        Err(e) if !e.status().is_server_error() => (Vec::new(), format!("No drop-one table: {e}")),
        Err(e) => return Err(e),
    };
    let page = ContendersPage {
        layout: Layout::analysis(
            format!("Contenders · {}", analysis.name()),
            ctx.shared(),
            analysis.id(),
            analysis.name(),
            Section::Contenders,
        ),
        id: analysis.id().to_owned(),
        lede: format!(
            "Other choices of indicators for the same {}, compared by several criteria and by how well they predict \
             areas they were not fitted to.",
            analysis.glossary().areas()
        ),
        form: search_form(&analysis),
        result,
        result_message,
        job_link,
        compare,
        compare_error,
        compare_a,
        compare_b,
        drop_rows,
        drop_text,
        jobs: job_rows(&ctx, analysis.id())?,
    };
    let mut response = render(&page);
    if response.status() == StatusCode::OK {
        *response.status_mut() = status;
    }
    Ok(response)
}

fn parse_number<T: std::str::FromStr>(
    pairs: &[(String, String)],
    name: &str,
    what: &str,
    default: T,
) -> Result<T> {
    match forms::last(pairs, name).map(str::trim).filter(|v| !v.is_empty()) {
        None => Ok(default),
        Some(v) => v
            .parse()
            .map_err(|_| ServerError::BadRequest(format!("{what} must be a whole number, not {v:?}."))),
    }
}

/// The search request of the page's form.
fn request_from_form(pairs: &[(String, String)]) -> Result<SearchRequest> {
    let list =
        |name: &str| pairs.iter().filter(|(k, _)| k == name).map(|(_, v)| v.clone()).collect::<Vec<_>>();
    let max_size = match forms::last(pairs, "max_size").map(str::trim).filter(|v| !v.is_empty()) {
        None => None,
        Some(v) => Some(v.parse().map_err(|_| {
            ServerError::BadRequest(format!("The largest model size must be a whole number, not {v:?}."))
        })?),
    };
    Ok(SearchRequest {
        candidates: list("candidate"),
        forced: list("forced"),
        max_size,
        top: parse_number(pairs, "top", "Models listed per size", compute::DEFAULT_TOP)?,
        folds: parse_number(pairs, "folds", "The number of folds", compute::DEFAULT_FOLDS)?,
        repeats: parse_number(pairs, "repeats", "The number of repeats", compute::DEFAULT_REPEATS)?,
        seed: parse_number(pairs, "seed", "The seed", compute::DEFAULT_SEED)?,
        group: forms::last(pairs, "group").map(str::to_owned).filter(|g| !g.trim().is_empty()),
    })
}

/// Validates a request and starts its job.
async fn start_search(ctx: &Ctx, id: &str, request: SearchRequest) -> Result<Arc<Job>> {
    let analysis = ctx.analysis(id)?;
    let a = analysis.clone();
    let prepared = blocking(move || compute::prepare(&a, request)).await?;
    let p = &prepared.request;
    let title = format!(
        "Best subsets of {} candidate indicator{}, then {}-fold cross-validation repeated {} time{}",
        p.candidates.len(),
        if p.candidates.len() == 1 { "" } else { "s" },
        p.folds,
        p.repeats,
        if p.repeats == 1 { "" } else { "s" }
    );
    let spec = JobSpec {
        analysis: analysis.id().to_owned(),
        title,
        result_href: format!("/analyses/{}/contenders?job={{job}}", analysis.id()),
    };
    ctx.app().jobs().spawn(spec, move |ctl| {
        let result = compute::run(analysis.id(), &prepared, ctl)?;
        if result.own_model.is_some() {
            let choice = result.model_choice.clone();
            analysis.update_extras(|e| e.model_choice = Some(choice)).map_err(|e| e.to_string())?;
        }
        Ok(result)
    })
}

/// `POST /analyses/{id}/contenders/search`: starts a search; 303 to its progress page.
async fn form_search(State(ctx): State<Ctx>, Path(id): Path<String>, request: Request) -> Result<Response> {
    let pairs =
        forms::read(request, FormReading::plain("The search form must be sent as a web form.")).await?;
    let request = request_from_form(&pairs)?;
    let job = start_search(&ctx, &id, request).await?;
    Ok(super::see_other_to(&format!("/jobs/{}", job.id())))
}

/// `POST /api/analyses/{id}/contenders/search`: starts a search from JSON options; 202 with the
/// job document and `Location: /api/jobs/{job}`.
async fn api_search(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    body: Bytes,
) -> std::result::Result<Response, ApiError> {
    let request: SearchRequest = serde_json::from_slice(&body)
        .map_err(|e| ServerError::BadRequest(format!("The search options could not be read: {e}.")))?;
    let job = start_search(&ctx, &id, request).await?;
    let mut response = (StatusCode::ACCEPTED, Json(job.document())).into_response();
    let location = HeaderValue::from_str(&format!("/api/jobs/{}", job.id()))
        .map_err(|_| ServerError::Internal("a job id is not a header value".into()))?;
    response.headers_mut().insert(header::LOCATION, location);
    Ok(response)
}

/// `GET /api/analyses/{id}/contenders/drop-one[?folds=&repeats=&seed=]`.
async fn api_drop_one(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    query: std::result::Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> std::result::Result<Json<DropOneDocument>, ApiError> {
    let Query(pairs) =
        query.map_err(|_| ServerError::BadRequest("The address has a malformed query.".into()))?;
    let d = default_drop_cv();
    let cv = DropCv {
        folds: parse_number(&pairs, "folds", "The number of folds", d.folds)?,
        repeats: parse_number(&pairs, "repeats", "The number of repeats", d.repeats)?,
        seed: parse_number(&pairs, "seed", "The seed", d.seed)?,
    };
    let analysis = ctx.analysis(&id)?;
    Ok(Json(blocking(move || compute::drop_one_table(&analysis, cv)).await?))
}

/// `GET /api/analyses/{id}/contenders/compare?a=…&b=…[&job=…]`.
async fn api_compare(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    query: std::result::Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> std::result::Result<Json<CompareDocument>, ApiError> {
    let Query(pairs) =
        query.map_err(|_| ServerError::BadRequest("The address has a malformed query.".into()))?;
    let analysis = ctx.analysis(&id)?;
    let (Some(a), Some(b)) = (forms::last(&pairs, "a"), forms::last(&pairs, "b")) else {
        return Err(ServerError::BadRequest(
            "Name both models: a=… and b=…, each a comma-separated list of columns (empty for no indicators).".into(),
        )
        .into());
    };
    let within = match forms::last(&pairs, "job").filter(|j| !j.is_empty()) {
        Some(job_id) => match job_result(&ctx, &analysis, job_id)?.1 {
            Ok(r) => r.candidate_columns.clone(),
            Err(message) => return Err(ServerError::BadRequest(message).into()),
        },
        None => Vec::new(),
    };
    let (a, b) = (compute::column_list(a), compute::column_list(b));
    Ok(Json(blocking(move || compute::compare(&analysis, &a, &b, &within)).await?))
}

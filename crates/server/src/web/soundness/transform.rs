//! The transformation search run again with the analyst's settings, as a background job.
//!
//! The Soundness page shows the search computed with the checks at the default settings. Its
//! form posts other settings (folds, seed, range of response powers, how many candidates get a
//! diagnostics summary) here; they are validated, the engine's search runs as a job with a
//! progress bar and a cancel button, and the ranked table stays at
//! `/analyses/{id}/soundness/transform?job={job}`. The search reports; it never changes the model.

use std::sync::Arc;

use askama::Template;
use axum::Json;
use axum::body::Bytes;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Path, Query, Request, State};
use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::{Deserialize, Serialize};
use wardcast_contract::checks::{Outcome, SearchDoc};
use wardcast_engine::diagnostics::{self, CheckOptions, SearchControl};

use super::{CandidateRow, candidate_rows};
use crate::error::{ApiError, Result, ServerError};
use crate::web::Ctx;
use crate::web::forms::{self, FormReading};
use crate::web::jobs::{self, Finished, Job, JobSpec};
use crate::web::pages::{Layout, Section, render, section_href};
use crate::web::state::Analysis;
use crate::web::words::fmt_prose;

/// The settings of a search as sent: every field may be left out for its default.
#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TransformRequest {
    /// Cross-validation folds (2 to 100, at most the number of rows).
    pub folds: Option<usize>,
    /// Seed of the folds.
    pub seed: Option<u64>,
    /// Lowest power of the response profile (at most −1).
    pub lambda_low: Option<f64>,
    /// Highest power of the response profile (at least 1).
    pub lambda_high: Option<f64>,
    /// How many of the best candidates get a diagnostics summary and head the table (0 to 20).
    pub top: Option<usize>,
}

/// The settings a search ran with, recorded with its result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TransformSettings {
    /// Cross-validation folds.
    pub folds: usize,
    /// Seed of the folds.
    pub seed: u64,
    /// Lowest power of the response profile.
    pub lambda_low: f64,
    /// Highest power of the response profile.
    pub lambda_high: f64,
    /// How many of the best candidates got a diagnostics summary.
    pub top: usize,
}

/// The result of a search job, as `/api/jobs/{job}` serves it under `result`.
#[derive(Debug, Clone, Serialize)]
pub struct TransformResult {
    /// Always `transformation_search`.
    pub kind: &'static str,
    /// The analysis whose model was searched (the model itself is unchanged).
    pub analysis: String,
    /// The settings it ran with.
    pub settings: TransformSettings,
    /// The ranked search, in the form of the checks document's `transformations.search`.
    pub search: Outcome<SearchDoc>,
}

/// The values of the form, as shown in its fields.
#[derive(Debug, Clone)]
pub struct TransformForm {
    /// Folds.
    pub folds: String,
    /// Seed.
    pub seed: String,
    /// Lowest power.
    pub lambda_low: String,
    /// Highest power.
    pub lambda_high: String,
    /// Candidates with a summary.
    pub top: String,
}

impl TransformForm {
    /// The form at the settings the checks use.
    pub fn defaults() -> Self {
        let d = CheckOptions::default();
        let (lo, hi) = d.lambda_range();
        TransformForm {
            folds: d.cv_folds().to_string(),
            seed: d.cv_seed().to_string(),
            lambda_low: lo.to_string(),
            lambda_high: hi.to_string(),
            top: d.top_candidates().to_string(),
        }
    }

    fn from_settings(s: &TransformSettings) -> Self {
        TransformForm {
            folds: s.folds.to_string(),
            seed: s.seed.to_string(),
            lambda_low: s.lambda_low.to_string(),
            lambda_high: s.lambda_high.to_string(),
            top: s.top.to_string(),
        }
    }
}

fn bad(message: String) -> ServerError {
    ServerError::BadRequest(message)
}

/// Checks a request against the model (`rows` used, `coefficients` estimated) and turns it into
/// the settings and the engine's options.
fn validate(
    request: &TransformRequest,
    rows: usize,
    coefficients: usize,
) -> Result<(TransformSettings, CheckOptions)> {
    let d = CheckOptions::default();
    let folds = request.folds.unwrap_or(d.cv_folds());
    let seed = request.seed.unwrap_or(d.cv_seed());
    let lambda_low = request.lambda_low.unwrap_or(d.lambda_range().0);
    let lambda_high = request.lambda_high.unwrap_or(d.lambda_range().1);
    let top = request.top.unwrap_or(d.top_candidates());
    if folds < 2 {
        return Err(bad(format!("Cross-validation needs at least 2 folds; {folds} was given.")));
    }
    if folds > rows {
        return Err(bad(format!(
            "The model uses {rows} rows, so there can be at most {rows} folds; {folds} were asked for."
        )));
    }
    if folds > 100 {
        return Err(bad(format!("At most 100 folds are allowed; {folds} were asked for.")));
    }
    let training = rows - rows.div_ceil(folds);
    if training <= coefficients {
        return Err(bad(format!(
            "With {folds} folds the smallest training set has {training} rows, too few for the model's \
             {coefficients} coefficients; use more folds."
        )));
    }
    if !(lambda_low.is_finite() && lambda_high.is_finite()) {
        return Err(bad("The range of powers must be two ordinary numbers.".into()));
    }
    if lambda_low >= lambda_high {
        return Err(bad(format!(
            "The lowest power must be below the highest; {} to {} was given.",
            fmt_prose(lambda_low),
            fmt_prose(lambda_high)
        )));
    }
    if lambda_low > -1.0 || lambda_high < 1.0 {
        return Err(bad(format!(
            "The range of powers must reach from −1 or lower to 1 or higher, so that the usual powers \
             (reciprocal, logarithm, square root, none) can be judged; {} to {} was given.",
            fmt_prose(lambda_low),
            fmt_prose(lambda_high)
        )));
    }
    if lambda_high - lambda_low > 20.0 {
        return Err(bad(format!(
            "The range of powers may span at most 20; {} to {} spans {}.",
            fmt_prose(lambda_low),
            fmt_prose(lambda_high),
            fmt_prose(lambda_high - lambda_low)
        )));
    }
    if top > 20 {
        return Err(bad(format!(
            "At most 20 candidates can get a diagnostics summary; {top} were asked for."
        )));
    }
    // The engine checks the same limits; its message stands in should they ever differ.
    let engine = |e: wardcast_engine::EngineError| bad(format!("The settings were not accepted: {e}."));
    let opts = d
        .with_cv_folds(folds)
        .map_err(engine)?
        .with_cv_seed(seed)
        .with_lambda_range(lambda_low, lambda_high)
        .map_err(engine)?
        .with_top_candidates(top)
        .map_err(engine)?;
    Ok((TransformSettings { folds, seed, lambda_low, lambda_high, top }, opts))
}

/// A form field as a number, `None` when left empty.
fn number<T: std::str::FromStr>(pairs: &[(String, String)], name: &str, what: &str) -> Result<Option<T>> {
    match forms::last(pairs, name).map(str::trim).filter(|v| !v.is_empty()) {
        None => Ok(None),
        Some(v) => v.parse().map(Some).map_err(|_| bad(format!("{what} must be a number, not {v:?}."))),
    }
}

fn request_from_form(pairs: &[(String, String)]) -> Result<TransformRequest> {
    Ok(TransformRequest {
        folds: number(pairs, "folds", "The number of folds (a whole number)")?,
        seed: number(pairs, "seed", "The seed (a whole number, 0 or more)")?,
        lambda_low: number(pairs, "lambda_low", "The lowest power")?,
        lambda_high: number(pairs, "lambda_high", "The highest power")?,
        top: number(pairs, "top", "The number of candidates with a summary (a whole number)")?,
    })
}

/// Validates a request and starts its job.
async fn start(ctx: &Ctx, id: &str, request: &TransformRequest) -> Result<Arc<Job>> {
    let analysis = ctx.analysis(id)?;
    let fit = analysis.fitted().fit();
    let (settings, opts) = validate(request, fit.nobs(), fit.nparams())?;
    let title = format!(
        "Transformation search: {}-fold cross-validation, seed {}, response powers {} to {}",
        settings.folds,
        settings.seed,
        fmt_prose(settings.lambda_low),
        fmt_prose(settings.lambda_high)
    );
    let spec = JobSpec {
        analysis: analysis.id().to_owned(),
        title,
        result_href: format!("/analyses/{}/soundness/transform?job={{job}}", analysis.id()),
    };
    ctx.app().jobs().spawn(spec, move |ctl| {
        let progress = |done: usize, total: usize| ctl.progress(done as u64, total as u64);
        let control = SearchControl { progress: Some(&progress), cancel: Some(ctl.cancel_flag().as_ref()) };
        let outcome = diagnostics::transform_search(analysis.fitted().fit(), &opts, control)
            .map_err(|e| e.to_string())?;
        Ok(TransformResult {
            kind: "transformation_search",
            analysis: analysis.id().to_owned(),
            settings,
            search: SearchDoc::outcome(&outcome),
        })
    })
}

/// `POST /analyses/{id}/soundness/transform`: starts a search; 303 to its progress page.
pub(super) async fn form_start(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    request: Request,
) -> Result<Response> {
    let pairs =
        forms::read(request, FormReading::plain("The search settings must be sent as a web form.")).await?;
    let request = request_from_form(&pairs)?;
    let job = start(&ctx, &id, &request).await?;
    Ok(crate::web::see_other_to(&format!("/jobs/{}", job.id())))
}

/// `POST /api/analyses/{id}/soundness/transform`: starts a search from JSON settings (an empty
/// body takes the defaults); 202 with the job document and `Location: /api/jobs/{job}`.
pub(super) async fn api_start(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    body: Bytes,
) -> std::result::Result<Response, ApiError> {
    let request: TransformRequest = if body.iter().all(u8::is_ascii_whitespace) {
        TransformRequest::default()
    } else {
        serde_json::from_slice(&body)
            .map_err(|e| bad(format!("The search settings could not be read: {e}.")))?
    };
    let job = start(&ctx, &id, &request).await?;
    let mut response = (StatusCode::ACCEPTED, Json(job.document())).into_response();
    let location = HeaderValue::from_str(&format!("/api/jobs/{}", job.id()))
        .map_err(|_| ServerError::Internal("a job id is not a header value".into()))?;
    response.headers_mut().insert(header::LOCATION, location);
    Ok(response)
}

/// The settings as shown on the result page.
#[derive(Debug, Clone)]
pub struct SettingsView {
    /// Folds.
    pub folds: usize,
    /// Seed.
    pub seed: u64,
    /// Whether the seed is the one the checks use.
    pub default_seed: bool,
    /// Lowest power.
    pub lambda_low: String,
    /// Highest power.
    pub lambda_high: String,
    /// Candidates with a summary.
    pub top: usize,
}

/// The result page of a search job.
#[derive(Debug, Template)]
#[template(path = "soundness_transform.html")]
pub struct TransformPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id.
    pub id: String,
    /// The plural noun for the areas.
    pub areas: String,
    /// The job id.
    pub job_id: String,
    /// Why there is no table (still running, cancelled, failed, another kind of job).
    pub message: Option<String>,
    /// The settings, when the job finished.
    pub settings: Option<SettingsView>,
    /// The ranking criterion in words.
    pub search_criterion: String,
    /// The columns whose powers were tried.
    pub searched: String,
    /// The leading candidates (and the model as specified).
    pub search_top: Vec<CandidateRow>,
    /// The other candidates.
    pub search_rest: Vec<CandidateRow>,
    /// Notes of the search.
    pub search_notes: Vec<String>,
    /// Why the search could not run for this model.
    pub search_missing: String,
    /// The form, filled with the settings of this job.
    pub search_form: TransformForm,
}

impl TransformPage {
    /// The Data page, where a transformation is chosen.
    pub fn data_href(&self) -> String {
        section_href(&self.id, Section::Data)
    }

    /// The Soundness page.
    pub fn soundness_href(&self) -> String {
        section_href(&self.id, Section::Soundness)
    }
}

/// The job `job_id` of this analysis with its finished search, or the reason there is none.
fn job_result(ctx: &Ctx, analysis: &Analysis, job_id: &str) -> Result<(Arc<Job>, Finished<TransformResult>)> {
    jobs::finished(
        ctx,
        analysis.id(),
        job_id,
        "This job is not a transformation search; its own page shows its result.",
    )
}

/// `GET /analyses/{id}/soundness/transform?job=…`: the ranked table of a search job. Without a
/// job it leads to the form on the Soundness page.
pub(super) async fn page(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    query: std::result::Result<Query<Vec<(String, String)>>, QueryRejection>,
) -> Result<Response> {
    let Query(pairs) = query.map_err(|_| bad("The address has a malformed query.".into()))?;
    let analysis = ctx.analysis(&id)?;
    let Some(job_id) = forms::last(&pairs, "job").filter(|j| !j.is_empty()) else {
        return Ok(crate::web::see_other_to(&format!("/analyses/{}/soundness#search-again", analysis.id())));
    };
    let (job, outcome) = job_result(&ctx, &analysis, job_id)?;
    let mut page = TransformPage {
        layout: Layout::analysis(
            format!("Transformation search · {}", analysis.name()),
            ctx.shared(),
            analysis.id(),
            analysis.name(),
            Section::Soundness,
        ),
        id: analysis.id().to_owned(),
        areas: analysis.glossary().areas().to_owned(),
        job_id: job.id().to_owned(),
        message: None,
        settings: None,
        search_criterion: String::new(),
        searched: String::new(),
        search_top: Vec::new(),
        search_rest: Vec::new(),
        search_notes: Vec::new(),
        search_missing: String::new(),
        search_form: TransformForm::defaults(),
    };
    match outcome {
        Err(message) => page.message = Some(message),
        Ok(result) => {
            let s = &result.settings;
            page.settings = Some(SettingsView {
                folds: s.folds,
                seed: s.seed,
                default_seed: s.seed == CheckOptions::default().cv_seed(),
                lambda_low: fmt_prose(s.lambda_low),
                lambda_high: fmt_prose(s.lambda_high),
                top: s.top,
            });
            page.search_form = TransformForm::from_settings(s);
            match &result.search {
                Outcome::Ok { result: search } => {
                    let (top, rest) = candidate_rows(search, s.top);
                    page.search_criterion = search.criterion.clone();
                    page.searched = search.searched.join(", ");
                    page.search_top = top;
                    page.search_rest = rest;
                    page.search_notes = search.notes.clone();
                }
                Outcome::Unavailable { reason } => page.search_missing = format!("Not available: {reason}."),
            }
        }
    }
    Ok(render(&page))
}

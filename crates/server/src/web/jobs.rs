//! Background jobs: long computations (subset searches, repeated cross-validation,
//! transformation searches) run on the blocking pool with progress, a cancel flag and a result
//! that stays at a stable URL.
//!
//! A page handler starts a job with [`Jobs::spawn`], giving the work as a closure that reports
//! progress through [`JobControl`] and returns a serialisable result. The job's own pages are
//! generic:
//!
//! | Method | Path                       | What                                                   |
//! |--------|----------------------------|--------------------------------------------------------|
//! | GET    | `/jobs/{job}`              | progress bar (refreshes itself), cancel button, result link |
//! | POST   | `/jobs/{job}/cancel`       | asks the job to stop; 303 back to `/jobs/{job}`         |
//! | GET    | `/api/jobs/{job}`          | the job document: state, progress and, when done, the result |
//! | POST   | `/api/jobs/{job}/cancel`   | the same cancel, answered with the job document         |
//!
//! The result page of a finished job is the page that started it (e.g. the Contenders page
//! with `?job=…`), which reads the typed result back with [`Job::result`].

use std::any::Any;
use std::collections::BTreeMap;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Mutex, RwLock};
use std::time::Instant;

use askama::Template;
use axum::Json;
use axum::Router;
use axum::extract::{Path, State};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use serde::Serialize;
use wardcast_contract::SCHEMA_VERSION;

use super::Ctx;
use super::pages::{Layout, render};
use crate::error::{ApiError, Result, ServerError};

/// How far a job has come: `done` of `total` steps (total 0 while unknown).
#[derive(Debug, Default)]
struct Progress {
    done: AtomicU64,
    total: AtomicU64,
}

/// What a running job's closure gets: progress reporting and the cancel flag.
#[derive(Debug, Clone)]
pub struct JobControl {
    progress: Arc<Progress>,
    cancel: Arc<AtomicBool>,
}

impl JobControl {
    /// Reports that `done` of `total` steps are finished.
    pub fn progress(&self, done: u64, total: u64) {
        self.progress.total.store(total, Ordering::Relaxed);
        self.progress.done.store(done.min(total), Ordering::Relaxed);
    }

    /// Whether the analyst asked the job to stop. Long loops check it between steps.
    pub fn cancelled(&self) -> bool {
        self.cancel.load(Ordering::Relaxed)
    }

    /// The cancel flag itself, for engine functions that take one.
    pub fn cancel_flag(&self) -> &Arc<AtomicBool> {
        &self.cancel
    }
}

/// Where a job stands.
#[derive(Debug, Clone)]
pub enum JobState {
    /// Still computing.
    Running,
    /// Finished; the result as JSON and as the typed value the starting page reads back.
    Done { json: Arc<serde_json::Value>, value: Arc<dyn Any + Send + Sync> },
    /// Stopped by the analyst before it finished.
    Cancelled,
    /// Failed, with a plain-language reason.
    Failed(String),
}

/// One background job.
#[derive(Debug)]
pub struct Job {
    id: String,
    analysis: String,
    title: String,
    result_href: String,
    started: Instant,
    control: JobControl,
    state: Mutex<JobState>,
    seconds: Mutex<Option<f64>>,
}

impl Job {
    /// The job id (part of its URL).
    pub fn id(&self) -> &str {
        &self.id
    }

    /// The analysis it belongs to.
    pub fn analysis(&self) -> &str {
        &self.analysis
    }

    /// What it computes, in words ("Best subsets of 7 candidate indicators").
    pub fn title(&self) -> &str {
        &self.title
    }

    /// The page that shows its result.
    pub fn result_href(&self) -> &str {
        &self.result_href
    }

    /// The current state.
    pub fn state(&self) -> JobState {
        self.state
            .lock()
            .map(|s| s.clone())
            .unwrap_or_else(|_| JobState::Failed("the job's lock was poisoned".into()))
    }

    /// `(done, total)` steps.
    pub fn progress(&self) -> (u64, u64) {
        (
            self.control.progress.done.load(Ordering::Relaxed),
            self.control.progress.total.load(Ordering::Relaxed),
        )
    }

    /// Asks the job to stop.
    pub fn cancel(&self) {
        self.control.cancel.store(true, Ordering::Relaxed);
    }

    /// The typed result, when the job finished with a value of type `T`.
    pub fn result<T: Any + Send + Sync>(&self) -> Option<Arc<T>> {
        match self.state() {
            JobState::Done { value, .. } => value.downcast::<T>().ok(),
            _ => None,
        }
    }

    /// The job document served by `/api/jobs/{job}`.
    pub fn document(&self) -> JobDocument {
        let (done, total) = self.progress();
        let (state, result, error) = match self.state() {
            JobState::Running => ("running", None, None),
            JobState::Done { json, .. } => ("done", Some((*json).clone()), None),
            JobState::Cancelled => ("cancelled", None, None),
            JobState::Failed(e) => ("failed", None, Some(e)),
        };
        JobDocument {
            schema_version: SCHEMA_VERSION,
            kind: "job",
            id: self.id.clone(),
            analysis: self.analysis.clone(),
            title: self.title.clone(),
            state,
            done,
            total,
            seconds: self
                .seconds
                .lock()
                .ok()
                .and_then(|s| *s)
                .unwrap_or_else(|| self.started.elapsed().as_secs_f64()),
            page: format!("/jobs/{}", self.id),
            result_page: self.result_href.clone(),
            result,
            error,
        }
    }

    fn finish(&self, state: JobState) {
        if let Ok(mut s) = self.state.lock() {
            *s = state;
        }
        if let Ok(mut s) = self.seconds.lock() {
            *s = Some(self.started.elapsed().as_secs_f64());
        }
    }
}

/// The JSON form of a job.
#[derive(Debug, Clone, Serialize)]
pub struct JobDocument {
    /// Schema version.
    pub schema_version: &'static str,
    /// Always `job`.
    pub kind: &'static str,
    /// The job id.
    pub id: String,
    /// The analysis it belongs to.
    pub analysis: String,
    /// What it computes, in words.
    pub title: String,
    /// `running`, `done`, `cancelled` or `failed`.
    pub state: &'static str,
    /// Steps done.
    pub done: u64,
    /// Steps in all (0 while unknown).
    pub total: u64,
    /// Seconds since it started (running) or that it took (finished).
    pub seconds: f64,
    /// Its progress page.
    pub page: String,
    /// The page that shows its result.
    pub result_page: String,
    /// The result document, once done.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub result: Option<serde_json::Value>,
    /// Why it failed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub error: Option<String>,
}

/// What a new job is.
#[derive(Debug, Clone)]
pub struct JobSpec {
    /// The analysis it belongs to.
    pub analysis: String,
    /// What it computes, in words.
    pub title: String,
    /// The page that shows its result; `{job}` in it is replaced by the job id.
    pub result_href: String,
}

/// The session's jobs. Cheap to clone.
#[derive(Debug, Clone, Default)]
pub struct Jobs {
    jobs: Arc<RwLock<BTreeMap<String, Arc<Job>>>>,
    counter: Arc<AtomicU64>,
}

impl Jobs {
    /// Starts `work` on the blocking pool and returns the job at once. `work` reports progress
    /// through its [`JobControl`], checks the cancel flag between steps, and returns its result
    /// or a plain-language error. A job that notices the cancel flag returns any `Err`; it is
    /// then recorded as cancelled.
    ///
    /// Must be called inside the tokio runtime.
    pub fn spawn<T, F>(&self, spec: JobSpec, work: F) -> Result<Arc<Job>>
    where
        T: Serialize + Any + Send + Sync,
        F: FnOnce(&JobControl) -> std::result::Result<T, String> + Send + 'static,
    {
        let n = self.counter.fetch_add(1, Ordering::Relaxed) + 1;
        let id = format!("j{n}");
        let job = Arc::new(Job {
            result_href: spec.result_href.replace("{job}", &id),
            id,
            analysis: spec.analysis,
            title: spec.title,
            started: Instant::now(),
            control: JobControl { progress: Arc::default(), cancel: Arc::default() },
            state: Mutex::new(JobState::Running),
            seconds: Mutex::new(None),
        });
        self.jobs
            .write()
            .map_err(|_| ServerError::Internal("the job list lock was poisoned".into()))?
            .insert(job.id.clone(), job.clone());
        let running = job.clone();
        tokio::task::spawn_blocking(move || {
            let control = running.control.clone();
            let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| work(&control)));
            let state = match outcome {
                Ok(Ok(value)) => match serde_json::to_value(&value) {
                    Ok(json) => JobState::Done { json: Arc::new(json), value: Arc::new(value) },
                    Err(e) => JobState::Failed(format!("the result could not be written as JSON: {e}")),
                },
                Ok(Err(_)) if control.cancelled() => JobState::Cancelled,
                Ok(Err(reason)) => JobState::Failed(reason),
                Err(_) => JobState::Failed("the computation stopped unexpectedly".into()),
            };
            running.finish(state);
        });
        Ok(job)
    }

    /// The job with this id.
    pub fn get(&self, id: &str) -> Result<Option<Arc<Job>>> {
        let map =
            self.jobs.read().map_err(|_| ServerError::Internal("the job list lock was poisoned".into()))?;
        Ok(map.get(id).cloned())
    }

    /// The jobs of one analysis, newest first.
    pub fn of_analysis(&self, analysis: &str) -> Result<Vec<Arc<Job>>> {
        let map =
            self.jobs.read().map_err(|_| ServerError::Internal("the job list lock was poisoned".into()))?;
        let mut jobs: Vec<Arc<Job>> = map.values().filter(|j| j.analysis == analysis).cloned().collect();
        jobs.sort_by_key(|j| std::cmp::Reverse(j.started));
        Ok(jobs)
    }
}

/// The job routes.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
        .route("/jobs/{job}", get(page))
        .route("/jobs/{job}/cancel", post(cancel))
        .route("/api/jobs/{job}", get(api_get))
        .route("/api/jobs/{job}/cancel", post(api_cancel))
}

/// Refuses a malformed job id: one is the letter j followed by digits, 24 characters at most.
fn check_id(id: &str) -> Result<()> {
    let valid = id.len() <= 24 && id.starts_with('j') && id[1..].bytes().all(|b| b.is_ascii_digit());
    if valid {
        Ok(())
    } else {
        Err(ServerError::BadRequest("A job id is the letter j followed by digits.".into()))
    }
}

fn find(ctx: &Ctx, id: &str) -> Result<Arc<Job>> {
    check_id(id)?;
    ctx.app.jobs().get(id)?.ok_or_else(|| ServerError::NotFound(format!("There is no job called {id:?}.")))
}

/// A search job's finished result, or the sentence that says why it has none to show.
pub(crate) type Finished<T> = std::result::Result<Arc<T>, String>;

/// The search job `job_id` of the analysis `analysis` with its finished result of type `T`, or
/// the sentence that says why there is none; `other_kind` is said of a job that finished with a
/// result of another kind. A malformed id is a bad request; a job of another analysis is not
/// found.
pub(crate) fn finished<T: Any + Send + Sync>(
    ctx: &Ctx,
    analysis: &str,
    job_id: &str,
    other_kind: &str,
) -> Result<(Arc<Job>, Finished<T>)> {
    check_id(job_id)?;
    let job = ctx
        .app
        .jobs()
        .get(job_id)?
        .filter(|j| j.analysis() == analysis)
        .ok_or_else(|| ServerError::NotFound(format!("This analysis has no job called {job_id:?}.")))?;
    let outcome = match job.state() {
        JobState::Running => {
            Err("This search is still running; its progress page shows how far it has come.".into())
        }
        JobState::Cancelled => {
            Err("This search was cancelled before it finished, so it has no result.".into())
        }
        JobState::Failed(e) => Err(format!("This search stopped: {e}")),
        JobState::Done { .. } => job.result::<T>().ok_or_else(|| other_kind.to_owned()),
    };
    Ok((job, outcome))
}

/// The job page.
#[derive(Debug, Template)]
#[template(path = "job.html")]
pub struct JobPage {
    /// The frame.
    pub layout: Layout,
    /// The job document.
    pub job: JobDocument,
    /// Progress as a whole percentage, when the total is known.
    pub percent: Option<u64>,
}

/// `GET /jobs/{job}`: progress, cancel button and, when done, the way to the result.
async fn page(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    let job = find(&ctx, &id)?;
    let analysis = ctx.analysis(job.analysis())?;
    let doc = job.document();
    let percent = (doc.total > 0).then(|| doc.done * 100 / doc.total);
    let layout = Layout::analysis(
        job.title().to_owned(),
        ctx.shared(),
        analysis.id(),
        analysis.name(),
        // The page whose result the job computes stays marked in the navigation.
        if job.result_href().contains("/soundness/") {
            super::pages::Section::Soundness
        } else {
            super::pages::Section::Contenders
        },
    );
    let mut response = render(&JobPage { layout, job: doc, percent });
    if matches!(job.state(), JobState::Running) {
        // Refresh without JavaScript while the job runs.
        response.headers_mut().insert("refresh", axum::http::HeaderValue::from_static("1"));
    }
    Ok(response)
}

/// `POST /jobs/{job}/cancel`.
async fn cancel(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    let job = find(&ctx, &id)?;
    job.cancel();
    Ok(super::see_other_to(&format!("/jobs/{}", job.id())))
}

/// `GET /api/jobs/{job}`.
async fn api_get(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
) -> std::result::Result<Json<JobDocument>, ApiError> {
    Ok(Json(find(&ctx, &id)?.document()))
}

/// `POST /api/jobs/{job}/cancel`.
async fn api_cancel(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
) -> std::result::Result<Response, ApiError> {
    let job = find(&ctx, &id)?;
    job.cancel();
    Ok(Json(job.document()).into_response())
}

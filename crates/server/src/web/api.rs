//! The JSON API under `/api/…`: the same documents the command line prints, one route per page.
//!
//! Errors are JSON too: `{"error": "<plain sentence>", "status": <code>}`.

use axum::Json;
use axum::extract::{Path, State};
use serde::Serialize;
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::fit::FitDocument;

use super::Ctx;
use crate::error::ApiError;

/// One entry of the analysis list.
#[derive(Debug, Serialize)]
pub struct AnalysisSummary {
    /// The id used in URLs.
    pub id: String,
    /// The analyst's name for it.
    pub name: String,
    /// The response column.
    pub response: String,
    /// Rows used in the fit.
    pub rows_used: usize,
    /// The page showing it.
    pub page: String,
    /// Its fit document.
    pub fit: String,
}

/// The analysis list document.
#[derive(Debug, Serialize)]
pub struct AnalysisList {
    /// Schema version.
    pub schema_version: &'static str,
    /// Always `analysis_list`.
    pub kind: &'static str,
    /// The analyses, ordered by id.
    pub analyses: Vec<AnalysisSummary>,
}

/// `GET /api/analyses`: the analyses of this session.
pub async fn list(State(ctx): State<Ctx>) -> Result<Json<AnalysisList>, ApiError> {
    let analyses = ctx
        .app
        .list()?
        .iter()
        .map(|a| AnalysisSummary {
            id: a.id().to_owned(),
            name: a.name().to_owned(),
            response: a.fit().spec.response.clone(),
            rows_used: a.fit().rows_used,
            page: format!("/analyses/{}", a.id()),
            fit: format!("/api/analyses/{}/fit", a.id()),
        })
        .collect();
    Ok(Json(AnalysisList { schema_version: SCHEMA_VERSION, kind: "analysis_list", analyses }))
}

/// `GET /api/analyses/{id}/fit`: the fit document, exactly as `wardcast fit` prints it.
pub async fn fit(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Json<FitDocument>, ApiError> {
    let analysis = ctx.analysis(&id)?;
    Ok(Json(analysis.fit().clone()))
}

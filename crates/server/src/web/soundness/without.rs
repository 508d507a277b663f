//! The model with and without one area, side by side: the "refit without" comparison.
//!
//! The refit drops the area from the analysis' own design (`Design::without_rows`) and fits
//! again on the blocking pool; nothing is stored and the analysis is unchanged.

use std::collections::HashMap;
use std::sync::Arc;

use askama::Template;
use axum::Json;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Path, Query, State};
use axum::response::Response;
use serde::Serialize;
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::fit::FitDocument;
use wardcast_contract::spec::ExclusionSpec;
use wardcast_engine::{Fit, FitOptions};

use super::query_value;
use crate::error::{ApiError, Result, ServerError};
use crate::web::effects::Figure;
use crate::web::pages::{Layout, Section, render, section_href};
use crate::web::state::Analysis;
use crate::web::words::{fmt_num, in_sentence};
use crate::web::{Ctx, blocking};

/// The longest region key the comparison accepts.
const MAX_KEY_CHARS: usize = 200;

/// The reason recorded in the comparison's spec for the area left out.
const COMPARISON_REASON: &str = "left out for comparison on the Soundness page";

/// The comparison document served by `GET /api/analyses/{id}/soundness/without?key=…`.
#[derive(Debug, Clone, Serialize)]
pub struct RefitComparison {
    /// Schema version.
    pub schema_version: &'static str,
    /// Always `refit_without`.
    pub kind: &'static str,
    /// The analysis.
    pub analysis: String,
    /// The area left out.
    pub key: String,
    /// The model as fitted.
    pub original: FitDocument,
    /// The model fitted without the area; its spec records the exclusion.
    pub without: FitDocument,
}

/// Reads and checks the `key` parameter.
fn key_of(query: std::result::Result<Query<HashMap<String, String>>, QueryRejection>) -> Result<String> {
    let Query(params) =
        query.map_err(|_| ServerError::BadRequest("The address's query string could not be read.".into()))?;
    let key = params.get("key").map(|k| k.trim()).unwrap_or_default();
    if key.is_empty() {
        return Err(ServerError::BadRequest(
            "Name the area to leave out, e.g. ?key=LK-47 (the region key of a row of the model).".into(),
        ));
    }
    if key.chars().count() > MAX_KEY_CHARS || key.chars().any(char::is_control) {
        return Err(ServerError::BadRequest(format!(
            "A region key is at most {MAX_KEY_CHARS} characters without control characters."
        )));
    }
    Ok(key.to_owned())
}

/// Refits the analysis without the row keyed `key` (blocking numerics).
fn compare(analysis: &Analysis, key: &str) -> Result<RefitComparison> {
    let design = analysis.fitted().fit().design();
    if !design.keys().iter().any(|k| k == key) {
        return Err(ServerError::NotFound(format!(
            "No area keyed {key:?} is among the rows this model uses, so there is nothing to leave out."
        )));
    }
    let reduced = design.without_rows(&[key.to_owned()])?;
    let fit = Fit::new(&reduced, &FitOptions::default())?;
    let mut spec = analysis.spec().clone();
    spec.exclusions.push(ExclusionSpec { key: key.to_owned(), reason: COMPARISON_REASON.to_owned() });
    let without = FitDocument::from_fit(&fit, &spec)?;
    Ok(RefitComparison {
        schema_version: SCHEMA_VERSION,
        kind: "refit_without",
        analysis: analysis.id().to_owned(),
        key: key.to_owned(),
        original: analysis.fit().clone(),
        without,
    })
}

async fn comparison(ctx: &Ctx, id: &str, key: String) -> Result<(Arc<Analysis>, RefitComparison)> {
    let analysis = ctx.analysis(id)?;
    let a = analysis.clone();
    let doc = blocking(move || compare(&a, &key)).await?;
    Ok((analysis, doc))
}

/// One coefficient with and without the area.
#[derive(Debug, Clone)]
pub struct TermRow {
    /// The term.
    pub term: String,
    /// Estimate, interval, as fitted.
    pub with: [Figure; 3],
    /// Estimate, interval, without the area.
    pub without: [Figure; 3],
    /// The change of the estimate.
    pub change: Figure,
    /// The change in classical standard errors of the original fit.
    pub change_in_se: Figure,
}

/// A fit statistic with and without the area.
#[derive(Debug, Clone)]
pub struct StatRow {
    /// The statistic.
    pub name: String,
    /// As fitted.
    pub with: Figure,
    /// Without the area.
    pub without: Figure,
}

/// The comparison page.
#[derive(Debug, Template)]
#[template(path = "soundness_without.html")]
pub struct WithoutPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id.
    pub id: String,
    /// The area left out (user data; escaped on output).
    pub key: String,
    /// The key percent-encoded for a query string.
    pub key_query: String,
    /// The interval level in percent.
    pub level_pct: String,
    /// The lede.
    pub lede: String,
    /// The sentence on the largest change.
    pub largest: String,
    /// Coefficients.
    pub terms: Vec<TermRow>,
    /// Fit statistics.
    pub stats: Vec<StatRow>,
    /// The Soundness page.
    pub back: String,
}

impl WithoutPage {
    fn build(analysis: &Analysis, doc: &RefitComparison, shared: bool) -> Self {
        let (a, b) = (&doc.original, &doc.without);
        let glossary = analysis.glossary();
        let areas = glossary.areas();
        let terms: Vec<TermRow> = a
            .coefficients
            .iter()
            .filter_map(|c| {
                let d = b.coefficients.iter().find(|d| d.term == c.term)?;
                let change = d.estimate - c.estimate;
                Some(TermRow {
                    term: c.term.clone(),
                    with: [
                        Figure::new(c.estimate),
                        Figure::new(c.interval.low),
                        Figure::new(c.interval.high),
                    ],
                    without: [
                        Figure::new(d.estimate),
                        Figure::new(d.interval.low),
                        Figure::new(d.interval.high),
                    ],
                    change: Figure::new(change),
                    change_in_se: Figure::new(change / c.std_error),
                })
            })
            .collect();
        let largest = a
            .coefficients
            .iter()
            .filter(|c| c.term != "(intercept)")
            .filter_map(|c| {
                let d = b.coefficients.iter().find(|d| d.term == c.term)?;
                let z = (d.estimate - c.estimate) / c.std_error;
                z.is_finite().then_some((c, d, z))
            })
            .max_by(|x, y| x.2.abs().total_cmp(&y.2.abs()))
            .map(|(c, d, z)| {
                format!(
                    "Leaving {} out moves the coefficient of {} most: from {} to {}, a shift of {} of its standard \
                     errors as fitted.",
                    doc.key,
                    c.term,
                    fmt_num(c.estimate),
                    fmt_num(d.estimate),
                    fmt_num(z.abs())
                )
            })
            .unwrap_or_default();
        let count = |n: usize| Figure { text: n.to_string(), raw: format!("{:?}", n as f64) };
        let stat = |name: &str, x: f64, y: f64| StatRow {
            name: name.into(),
            with: Figure::new(x),
            without: Figure::new(y),
        };
        let stats = vec![
            StatRow {
                name: format!("{} in the model", crate::web::words::capitalise(areas)),
                with: count(a.rows_used),
                without: count(b.rows_used),
            },
            stat("R²", a.r_squared, b.r_squared),
            stat("Adjusted R²", a.adj_r_squared, b.adj_r_squared),
            stat("Residual standard deviation", a.residual_sd, b.residual_sd),
        ];
        let response = glossary.column(&a.spec.response);
        WithoutPage {
            layout: Layout::analysis(
                format!("Without {} · {}", doc.key, analysis.name()),
                shared,
                analysis.id(),
                analysis.name(),
                Section::Soundness,
            ),
            id: analysis.id().to_owned(),
            key: doc.key.clone(),
            key_query: query_value(&doc.key),
            level_pct: crate::web::words::fmt_level(a.spec.level),
            lede: format!(
                "The model of {} fitted to all {} {areas} it uses, beside the same model fitted without {}. \
                 Nothing is changed: this page only compares.",
                in_sentence(&response.label),
                a.rows_used,
                doc.key
            ),
            largest,
            terms,
            stats,
            back: section_href(analysis.id(), Section::Soundness),
        }
    }
}

/// `GET /analyses/{id}/soundness/without?key=…`: the comparison page.
pub async fn page(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    query: std::result::Result<Query<HashMap<String, String>>, QueryRejection>,
) -> Result<Response> {
    let key = key_of(query)?;
    let (analysis, doc) = comparison(&ctx, &id, key).await?;
    Ok(render(&WithoutPage::build(&analysis, &doc, ctx.shared())))
}

/// `GET /api/analyses/{id}/soundness/without?key=…`: the comparison as JSON.
pub async fn json(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    query: std::result::Result<Query<HashMap<String, String>>, QueryRejection>,
) -> std::result::Result<Json<RefitComparison>, ApiError> {
    let key = key_of(query)?;
    let (_, doc) = comparison(&ctx, &id, key).await?;
    Ok(Json(doc))
}

//! The start page: the analyses of this session, each linked to its Effects page.

use askama::Template;
use axum::extract::State;
use axum::response::Response;

use super::Ctx;
use super::pages::{Layout, render};
use super::words::fmt_prose;
use crate::error::Result;

/// One analysis on the start page.
#[derive(Debug, Clone)]
pub struct AnalysisCard {
    /// Where its Effects page is.
    pub href: String,
    /// The analyst's name for it.
    pub name: String,
    /// "assault incidents per 10,000 residents across 63 districts".
    pub summary: String,
    /// R² as a percentage, e.g. "71.2%".
    pub share: String,
}

/// The start page.
#[derive(Debug, Template)]
#[template(path = "start.html")]
pub struct StartPage {
    /// The frame.
    pub layout: Layout,
    /// The analyses.
    pub cards: Vec<AnalysisCard>,
}

/// `GET /`: the start page.
pub async fn page(State(ctx): State<Ctx>) -> Result<Response> {
    let cards = ctx
        .app
        .list()?
        .iter()
        .map(|a| {
            let fit = a.fit();
            let glossary = a.glossary();
            AnalysisCard {
                href: format!("/analyses/{}", a.id()),
                name: a.name().to_owned(),
                summary: format!(
                    "{} across {} {}",
                    glossary.column(&fit.spec.response).label,
                    fit.rows_used,
                    glossary.areas()
                ),
                share: format!("{}%", fmt_prose(fit.r_squared * 100.0)),
            }
        })
        .collect();
    Ok(render(&StartPage { layout: Layout::plain("Start", ctx.shared()), cards }))
}

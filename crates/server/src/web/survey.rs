//! The Survey page: each column's summary and distribution, the scatter-plot matrix and the
//! correlation heat map of the chosen columns.
//!
//! | Route                              | What                                          |
//! |------------------------------------|-----------------------------------------------|
//! | `GET /analyses/{id}/survey`        | the page; `?col=a&col=b…` chooses the columns |
//! | `GET /api/analyses/{id}/survey`    | the [`SurveyDocument`], same `col` choice     |
//!
//! Choosing columns is a GET form that changes only the view. The page is built from the same
//! document the JSON route serves, so every number on it can be checked against the API.

use askama::Template;
use axum::Json;
use axum::Router;
use axum::extract::{Path, Query, State};
use axum::response::Response;
use axum::routing::get;
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::dataset::ColumnRole;
use wardcast_contract::numbers::Number;
use wardcast_contract::survey::{ColumnSurvey, CorrelationDoc, SurveyDocument};
use wardcast_engine::ColumnData;
use wardcast_engine::areas::{pairwise_pearson, summarise};
use wardcast_report::svg::{
    Axis, Bins, Chart, CorrelationHeatMap, Histogram, MATRIX_MAX_MEASURES, Marker, MatrixMeasure,
    ScatterMatrix,
};

use super::Ctx;
use super::effects::Figure;
use super::pages::{Layout, Section, render};
use super::state::Analysis;
use super::words::{capitalise, fmt_num};
use crate::error::{ApiError, Result, ServerError};

/// The routes of this page.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new().route("/analyses/{id}/survey", get(page)).route("/api/analyses/{id}/survey", get(api))
}

/// A number as shown and as computed.
pub(crate) fn figure(x: f64) -> Figure {
    Figure { text: fmt_num(x), raw: if x.is_finite() { format!("{x:?}") } else { String::new() } }
}

/// A possibly undefined number as shown and as computed.
pub(crate) fn figure_of(n: Number) -> Figure {
    match n.as_f64() {
        Some(x) if x.is_finite() => figure(x),
        _ => Figure { text: "undefined".into(), raw: String::new() },
    }
}

/// The role's plain name.
fn role_name(role: ColumnRole) -> &'static str {
    role.name()
}

/// The columns the query asks for: every `col` parameter, in order. Any other parameter is a
/// bad request, so a mistyped address does not silently show the default.
fn chosen_from_query(pairs: &[(String, String)]) -> Result<Vec<String>> {
    let mut chosen: Vec<String> = Vec::new();
    for (k, v) in pairs {
        if k != "col" {
            return Err(ServerError::BadRequest(format!(
                "The survey understands only the parameter \"col\" (a column to compare), not {k:?}."
            )));
        }
        if !chosen.contains(v) {
            chosen.push(v.clone());
        }
    }
    Ok(chosen)
}

/// The default choice: the response and the model's numeric predictors (and weights), at most
/// [`MATRIX_MAX_MEASURES`].
fn default_choice(analysis: &Analysis) -> Vec<String> {
    let numeric = analysis.numeric_columns();
    let spec = analysis.spec();
    let mut out: Vec<String> = Vec::new();
    let wanted =
        std::iter::once(spec.response.as_str()).chain(spec.predictors.iter().map(|p| p.column.as_str()));
    for c in wanted {
        if numeric.contains(&c) && !out.iter().any(|o| o == c) && out.len() < MATRIX_MAX_MEASURES {
            out.push(c.to_owned());
        }
    }
    out
}

/// Checks an explicit choice: known, numeric, two to [`MATRIX_MAX_MEASURES`] columns.
fn check_choice(analysis: &Analysis, chosen: Vec<String>) -> Result<Vec<String>> {
    if chosen.is_empty() {
        return Ok(default_choice(analysis));
    }
    let numeric = analysis.numeric_columns();
    for c in &chosen {
        match analysis.table().column(c) {
            None => {
                return Err(ServerError::BadRequest(format!("The table has no column called {c:?}.")));
            }
            Some(_) if !numeric.contains(&c.as_str()) => {
                return Err(ServerError::BadRequest(format!(
                    "The column {c:?} holds text, so it cannot be plotted or correlated; choose numeric columns."
                )));
            }
            Some(_) => {}
        }
    }
    if !(2..=MATRIX_MAX_MEASURES).contains(&chosen.len()) {
        return Err(ServerError::BadRequest(format!(
            "Choose between 2 and {MATRIX_MAX_MEASURES} columns to compare ({} were chosen).",
            chosen.len()
        )));
    }
    Ok(chosen)
}

/// A numeric column's values by name (empty when absent or text).
fn values_of<'a>(analysis: &'a Analysis, name: &str) -> &'a [Option<f64>] {
    match analysis.table().column(name).map(|c| &c.data) {
        Some(ColumnData::Numeric(v)) => v,
        _ => &[],
    }
}

/// Builds the survey document for the chosen columns (already checked).
pub fn survey_document(analysis: &Analysis, chosen: Vec<String>) -> Result<SurveyDocument> {
    let glossary = analysis.glossary();
    let metas = &analysis.source().columns;
    let role_of = |name: &str| metas.iter().find(|m| m.column == name).map(|m| role_name(m.role));
    let columns = analysis
        .table()
        .columns()
        .iter()
        .map(|c| {
            let info = glossary.column(&c.name);
            let unit = info.unit.as_deref();
            match &c.data {
                ColumnData::Numeric(v) => {
                    ColumnSurvey::numeric(&c.name, &info.label, unit, role_of(&c.name), &summarise(v))
                }
                ColumnData::Text(v) => ColumnSurvey::text(&c.name, &info.label, unit, role_of(&c.name), v),
            }
        })
        .collect();
    let slices: Vec<&[Option<f64>]> = chosen.iter().map(|c| values_of(analysis, c)).collect();
    let pc = pairwise_pearson(&slices)?;
    Ok(SurveyDocument {
        schema_version: SCHEMA_VERSION.to_owned(),
        kind: "survey".to_owned(),
        analysis: analysis.id().to_owned(),
        rows: analysis.table().nrows(),
        key: metas.iter().find(|m| m.role == ColumnRole::Key).map(|m| m.column.clone()),
        columns,
        correlation: CorrelationDoc::new(chosen.clone(), &pc),
        chosen,
    })
}

/// One summary figure of a column card.
#[derive(Debug, Clone)]
pub struct Stat {
    /// What it is, e.g. "Median".
    pub label: &'static str,
    /// The JSON field it mirrors, for the browser test.
    pub field: &'static str,
    /// The number.
    pub value: Figure,
}

/// One column's card.
#[derive(Debug, Clone)]
pub struct ColumnCard {
    /// The column name (user data; escaped on output).
    pub name: String,
    /// The label.
    pub label: String,
    /// The unit, or empty.
    pub unit: String,
    /// The role, or empty.
    pub role: String,
    /// Cells with a value.
    pub n: usize,
    /// Cells without one.
    pub missing: usize,
    /// The summary figures (numeric columns).
    pub stats: Vec<Stat>,
    /// The most frequent levels (text columns).
    pub levels: Vec<(String, usize)>,
    /// Levels not listed.
    pub more_levels: usize,
    /// A sentence about a text column's levels.
    pub levels_note: String,
    /// The distribution chart.
    pub chart_svg: Option<String>,
}

/// One checkbox of the column choice.
#[derive(Debug, Clone)]
pub struct Choice {
    /// The column name.
    pub name: String,
    /// Its label.
    pub label: String,
    /// Whether it is chosen now.
    pub checked: bool,
}

/// One pair of the correlation table.
#[derive(Debug, Clone)]
pub struct PairRow {
    /// The first column's label.
    pub a: String,
    /// The second column's label.
    pub b: String,
    /// Index of the first column in the choice.
    pub i: usize,
    /// Index of the second column in the choice.
    pub j: usize,
    /// Pearson's r.
    pub r: Figure,
    /// Rows behind it.
    pub rows: usize,
}

/// The Survey page.
#[derive(Debug, Template)]
#[template(path = "survey.html")]
pub struct SurveyPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id (for links).
    pub id: String,
    /// The opening line.
    pub lede: String,
    /// The table's name.
    pub source_name: String,
    /// One card per column.
    pub cards: Vec<ColumnCard>,
    /// The numeric columns to choose from.
    pub choices: Vec<Choice>,
    /// The query string of the current choice, for the JSON link (empty for the default).
    pub query: String,
    /// The scatter-plot matrix.
    pub matrix_svg: Option<String>,
    /// The heat map.
    pub heat_svg: Option<String>,
    /// Every pair's correlation.
    pub pairs: Vec<PairRow>,
    /// How many rows the correlations use, in words.
    pub rows_note: String,
}

fn log_chart(what: &str, r: wardcast_report::Result<String>) -> Option<String> {
    match r {
        Ok(svg) => Some(svg),
        Err(e) => {
            tracing::warn!(error = %e, chart = what, "a survey chart could not be drawn");
            None
        }
    }
}

impl SurveyPage {
    /// Builds the page from the document.
    pub fn build(analysis: &Analysis, doc: &SurveyDocument, explicit: bool, shared: bool) -> Self {
        let glossary = analysis.glossary();
        let areas = glossary.areas().to_owned();
        let cards = doc.columns.iter().map(|c| card(analysis, c, &areas)).collect();
        let choices = analysis
            .numeric_columns()
            .into_iter()
            .map(|name| Choice {
                name: name.to_owned(),
                label: glossary.column(name).label,
                checked: doc.chosen.iter().any(|c| c == name),
            })
            .collect();
        let axis_of = |name: &str| {
            let info = glossary.column(name);
            Axis::new(info.label, info.unit.unwrap_or_default())
        };
        let matrix_svg = (doc.chosen.len() >= 2)
            .then(|| {
                let plot = ScatterMatrix {
                    title: "The chosen columns, pair by pair".into(),
                    measures: doc
                        .chosen
                        .iter()
                        .map(|c| MatrixMeasure {
                            axis: axis_of(c),
                            values: values_of(analysis, c).iter().map(|v| v.unwrap_or(f64::NAN)).collect(),
                        })
                        .collect(),
                    items: areas.clone(),
                    summary: format!("Each dot is one of the {} {areas} in the table.", doc.rows),
                };
                log_chart("scatter matrix", plot.render())
            })
            .flatten();
        let corr = &doc.correlation;
        let labels: Vec<String> = corr.columns.iter().map(|c| glossary.column(c).label).collect();
        let heat_svg = (corr.columns.len() >= 2)
            .then(|| {
                let map = CorrelationHeatMap {
                    title: "How the chosen columns move together".into(),
                    labels: labels.clone(),
                    values: corr
                        .r
                        .iter()
                        .map(|row| row.iter().map(|v| v.as_f64().unwrap_or(f64::NAN)).collect())
                        .collect(),
                    measure: "Pearson correlation".into(),
                    decimals: Some(2),
                    summary: rows_sentence(corr, &areas),
                };
                log_chart("heat map", map.render())
            })
            .flatten();
        let mut pairs = Vec::new();
        for i in 0..corr.columns.len() {
            for j in i + 1..corr.columns.len() {
                pairs.push(PairRow {
                    a: labels[i].clone(),
                    b: labels[j].clone(),
                    i,
                    j,
                    r: figure_of(corr.r[i][j]),
                    rows: corr.rows[i][j],
                });
            }
        }
        let query = if explicit {
            doc.chosen.iter().map(|c| format!("col={}", encode_component(c))).collect::<Vec<_>>().join("&")
        } else {
            String::new()
        };
        SurveyPage {
            layout: Layout::analysis(
                format!("Survey · {}", analysis.name()),
                shared,
                analysis.id(),
                analysis.name(),
                Section::Survey,
            ),
            id: analysis.id().to_owned(),
            lede: format!(
                "What each column of the table holds across its {} {areas}, and how the chosen columns move together.",
                doc.rows
            ),
            source_name: analysis.source().name.clone(),
            cards,
            choices,
            query,
            matrix_svg,
            heat_svg,
            pairs,
            rows_note: rows_sentence(corr, &areas),
        }
    }
}

/// Says how many rows the correlations use, naming the pairs that use fewer when they differ.
fn rows_sentence(corr: &CorrelationDoc, areas: &str) -> String {
    let k = corr.columns.len();
    if k == 0 {
        return String::new();
    }
    if corr.same_rows {
        let m = corr.rows[0][0];
        return format!(
            "Every correlation uses the same {m} {areas}: those with a value in every chosen column."
        );
    }
    let most = corr.rows.iter().flatten().copied().max().unwrap_or(0);
    let fewer: Vec<String> = (0..k)
        .flat_map(|i| (i + 1..k).map(move |j| (i, j)))
        .filter(|&(i, j)| corr.rows[i][j] < most)
        .map(|(i, j)| format!("{} with {} ({})", corr.columns[i], corr.columns[j], corr.rows[i][j]))
        .collect();
    format!(
        "Each correlation uses the {areas} with values in both of its columns, so the counts differ: most pairs use {most}, \
         these use fewer: {}.",
        fewer.join("; ")
    )
}

/// Percent-encodes a query value (everything but unreserved characters).
fn encode_component(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for b in s.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.' | b'~') {
            out.push(b as char);
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    out
}

/// The card of one column.
fn card(analysis: &Analysis, c: &ColumnSurvey, areas: &str) -> ColumnCard {
    let unit = c.unit.clone().unwrap_or_default();
    let mut stats = Vec::new();
    let mut chart_svg = None;
    if c.kind == "numeric" {
        stats.push(Stat { label: "Mean", field: "mean", value: figure_of(c.mean) });
        stats.push(Stat { label: "Standard deviation", field: "sd", value: figure_of(c.sd) });
        if let Some(q) = c.quartiles {
            stats.push(Stat { label: "Smallest", field: "quartiles.min", value: figure(q.min) });
            stats.push(Stat { label: "Lower quartile", field: "quartiles.q1", value: figure(q.q1) });
            stats.push(Stat { label: "Median", field: "quartiles.median", value: figure(q.median) });
            stats.push(Stat { label: "Upper quartile", field: "quartiles.q3", value: figure(q.q3) });
            stats.push(Stat { label: "Largest", field: "quartiles.max", value: figure(q.max) });
            let values: Vec<f64> = values_of(analysis, &c.name).iter().flatten().copied().collect();
            let hist = Histogram {
                title: capitalise(&c.label),
                axis: Axis::new(c.label.clone(), unit.clone()),
                items: areas.to_owned(),
                values,
                bins: Bins::Auto,
                markers: vec![Marker { x: q.median, label: "Median".into() }],
                summary: format!(
                    "Distribution of {} across {} {areas}: median {}, middle half from {} to {}.",
                    c.label,
                    c.n,
                    fmt_num(q.median),
                    fmt_num(q.q1),
                    fmt_num(q.q3)
                ),
            };
            chart_svg = log_chart("histogram", hist.render());
        }
    }
    let shown = 8;
    let (levels, more_levels, levels_note) = match c.distinct {
        Some(d) if d == c.n && d > shown => (
            Vec::new(),
            0,
            format!("All {d} values differ from one another: the column names or labels the {areas}."),
        ),
        Some(d) => (
            c.levels.iter().take(shown).map(|l| (l.level.clone(), l.count)).collect(),
            d.saturating_sub(shown),
            format!("{d} different values."),
        ),
        None => (Vec::new(), 0, String::new()),
    };
    ColumnCard {
        name: c.name.clone(),
        label: c.label.clone(),
        unit,
        role: c.role.clone().unwrap_or_default(),
        n: c.n,
        missing: c.missing,
        stats,
        levels,
        more_levels,
        levels_note,
        chart_svg,
    }
}

/// `GET /analyses/{id}/survey`: the page.
pub async fn page(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    Query(pairs): Query<Vec<(String, String)>>,
) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let asked = chosen_from_query(&pairs)?;
    let explicit = !asked.is_empty();
    let chosen = check_choice(&analysis, asked)?;
    let doc = survey_document(&analysis, chosen)?;
    Ok(render(&SurveyPage::build(&analysis, &doc, explicit, ctx.shared())))
}

/// `GET /api/analyses/{id}/survey`: the survey document.
pub async fn api(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    Query(pairs): Query<Vec<(String, String)>>,
) -> std::result::Result<Json<SurveyDocument>, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let chosen = check_choice(&analysis, chosen_from_query(&pairs)?)?;
    Ok(Json(survey_document(&analysis, chosen)?))
}

//! The Areas page: observed against expected for every area used in the fit, with each area's
//! studentized deleted residual and its leave-one-out 95% prediction interval.
//!
//! | Route                           | What                                                    |
//! |---------------------------------|---------------------------------------------------------|
//! | `GET /analyses/{id}/areas`      | the page; `?sort=KEY&dir=asc\|desc` orders the table     |
//! | `GET /api/analyses/{id}/areas`  | the [`AreasDocument`], ordered by the same parameters   |
//!
//! An area is flagged when `|tᵢ| > t(0.975, n − p − 1)`, which is exactly when its observed
//! value lies outside the interval of a model fitted without it. The wording stays neutral
//! ("higher than the indicators predict"); the page says how many flags chance alone produces,
//! and that area results do not describe the people who live there.

use std::cmp::Ordering;
use std::collections::{HashMap, HashSet};

use askama::Template;
use axum::Json;
use axum::Router;
use axum::extract::{Path, Query, State};
use axum::response::Response;
use axum::routing::get;
use wardcast_contract::areas::{AreaRow, AreasDocument};
use wardcast_contract::dataset::ColumnRole;
use wardcast_engine::ColumnData;
use wardcast_engine::areas::deleted_intervals;
use wardcast_report::brief::text::{NEGATIVE_PREDICTION, any_negative};
use wardcast_report::svg::{Axis, Chart, Emphasis, IntervalStrip, StripRow};

use super::Ctx;
use super::effects::Figure;
use super::pages::{Layout, Section, render};
use super::state::Analysis;
use super::survey::{figure, figure_of};
use super::words::{fmt_num, in_sentence};
use crate::error::{ApiError, Result, ServerError};

/// The interval level of the page: 95%, so areas flag when `|tᵢ| > t(0.975, n − p − 1)`.
pub const AREAS_LEVEL: f64 = 0.95;

/// The routes of this page.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new().route("/analyses/{id}/areas", get(page)).route("/api/analyses/{id}/areas", get(api))
}

/// What the table can be ordered by.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SortKey {
    /// The area key.
    Key,
    /// The area name (only when the table has a name column).
    Name,
    /// The observed value.
    Observed,
    /// The predicted value.
    Predicted,
    /// The residual.
    Residual,
    /// The studentized deleted residual.
    T,
    /// The leverage.
    Leverage,
}

/// Every sort key with its parameter value and column heading.
const SORT_KEYS: [(SortKey, &str, &str); 7] = [
    (SortKey::Key, "key", "Area"),
    (SortKey::Name, "name", "Name"),
    (SortKey::Observed, "observed", "Observed"),
    (SortKey::Predicted, "predicted", "Predicted"),
    (SortKey::Residual, "residual", "Residual"),
    (SortKey::T, "t", "Studentized deleted residual"),
    (SortKey::Leverage, "leverage", "Leverage"),
];

/// A table order: a key and a direction.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Order {
    /// What to sort by.
    pub key: SortKey,
    /// Largest first.
    pub descending: bool,
}

impl Default for Order {
    fn default() -> Self {
        Order { key: SortKey::Key, descending: false }
    }
}

/// Reads `sort` and `dir`; anything else, or an unknown value, is a bad request.
fn order_from_query(pairs: &[(String, String)], has_names: bool) -> Result<Order> {
    let mut order = Order::default();
    for (k, v) in pairs {
        match k.as_str() {
            "sort" => {
                let found = SORT_KEYS.iter().find(|(_, name, _)| name == v).map(|(key, ..)| *key);
                order.key = match found {
                    Some(SortKey::Name) if !has_names => {
                        return Err(ServerError::BadRequest(
                            "This table has no name column, so the areas cannot be sorted by name.".into(),
                        ));
                    }
                    Some(key) => key,
                    None => {
                        let known: Vec<&str> = SORT_KEYS.iter().map(|(_, name, _)| *name).collect();
                        return Err(ServerError::BadRequest(format!(
                            "The areas can be sorted by {}, not by {v:?}.",
                            known.join(", ")
                        )));
                    }
                };
            }
            "dir" => {
                order.descending = match v.as_str() {
                    "asc" => false,
                    "desc" => true,
                    _ => {
                        return Err(ServerError::BadRequest(format!(
                            "The sort direction is \"asc\" or \"desc\", not {v:?}."
                        )));
                    }
                };
            }
            _ => {
                return Err(ServerError::BadRequest(format!(
                    "The areas page understands the parameters \"sort\" and \"dir\", not {k:?}."
                )));
            }
        }
    }
    Ok(order)
}

/// The table's name column, when there is one: a text column whose metadata role is group or
/// name and whose values are present and all different, so it names areas one to one.
fn name_column(analysis: &Analysis) -> Option<(&str, &[Option<String>])> {
    let metas = &analysis.source().columns;
    analysis.table().columns().iter().find_map(|c| {
        let ColumnData::Text(values) = &c.data else { return None };
        let is_group = metas.iter().any(|m| m.column == c.name && m.role == ColumnRole::Group);
        let mut seen = HashSet::new();
        let unique = values.iter().all(|v| v.as_deref().is_some_and(|s| seen.insert(s)));
        (is_group && unique).then_some((c.name.as_str(), values.as_slice()))
    })
}

/// Builds the areas document (rows in fit order).
pub fn areas_document(analysis: &Analysis) -> Result<AreasDocument> {
    let fit = analysis.fitted().fit();
    let intervals = deleted_intervals(fit, AREAS_LEVEL)?;
    let names = name_column(analysis).map(|(column, values)| {
        let row_of: HashMap<&str, usize> =
            analysis.table().keys().iter().enumerate().map(|(i, k)| (k.as_str(), i)).collect();
        let by_fit_row: Vec<Option<String>> = intervals
            .rows
            .iter()
            .map(|r| row_of.get(r.key.as_str()).and_then(|&i| values[i].clone()))
            .collect();
        (column, by_fit_row)
    });
    Ok(AreasDocument::new(
        analysis.id(),
        &fit.design().response_label(),
        fit.nparams(),
        &intervals,
        names.as_ref().map(|(c, v)| (*c, v.as_slice())),
    ))
}

/// Orders rows; undefined values go last whatever the direction.
pub fn sort_rows(rows: &mut [AreaRow], order: Order) {
    let num = |r: &AreaRow| -> Option<f64> {
        match order.key {
            SortKey::Observed => Some(r.observed),
            SortKey::Predicted => Some(r.predicted),
            SortKey::Residual => Some(r.residual),
            SortKey::T => r.studentized_deleted.as_f64(),
            SortKey::Leverage => Some(r.leverage),
            SortKey::Key | SortKey::Name => None,
        }
    };
    rows.sort_by(|a, b| {
        let primary = match order.key {
            SortKey::Key => Some(a.key.cmp(&b.key)),
            SortKey::Name => match (&a.name, &b.name) {
                (Some(x), Some(y)) => Some(x.cmp(y)),
                _ => None,
            },
            _ => match (num(a), num(b)) {
                (Some(x), Some(y)) => Some(x.total_cmp(&y)),
                _ => None,
            },
        };
        match primary {
            Some(o) => {
                let o = if order.descending { o.reverse() } else { o };
                o.then_with(|| a.key.cmp(&b.key))
            }
            // Undefined values last, then by key.
            None => {
                let defined = |r: &AreaRow| match order.key {
                    SortKey::Name => r.name.is_some(),
                    _ => num(r).is_some(),
                };
                match (defined(a), defined(b)) {
                    (true, false) => Ordering::Less,
                    (false, true) => Ordering::Greater,
                    _ => a.key.cmp(&b.key),
                }
            }
        }
    });
}

/// One column heading with its sort link.
#[derive(Debug, Clone)]
pub struct Heading {
    /// The heading text.
    pub label: &'static str,
    /// The link that sorts by this column (the other direction when it is already the sort).
    pub href: String,
    /// `ascending` or `descending` when this is the current sort, else empty.
    pub sorted: &'static str,
    /// What the link does, in words.
    pub hint: String,
}

/// One area row of the page.
#[derive(Debug, Clone)]
pub struct AreaLine {
    /// The key (user data; escaped on output).
    pub key: String,
    /// The name, or empty.
    pub name: String,
    /// Observed value.
    pub observed: Figure,
    /// Predicted value.
    pub predicted: Figure,
    /// Residual.
    pub residual: Figure,
    /// Studentized deleted residual.
    pub t: Figure,
    /// Leverage.
    pub leverage: Figure,
    /// Interval lower end.
    pub low: Figure,
    /// Interval upper end.
    pub high: Figure,
    /// `higher`, `lower`, `within` or `undefined`.
    pub flag: String,
    /// The flag in words.
    pub reading: String,
}

/// The Areas page.
#[derive(Debug, Template)]
#[template(path = "areas.html")]
pub struct AreasPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id.
    pub id: String,
    /// The opening line.
    pub lede: String,
    /// The plural noun for areas.
    pub areas: String,
    /// How many flagged, against chance, in words.
    pub chance: String,
    /// How the interval is made, in words.
    pub method: String,
    /// The flag threshold.
    pub t_critical: Figure,
    /// Extra notes (weights, transformed response).
    pub notes: Vec<String>,
    /// The chart.
    pub chart_svg: Option<String>,
    /// Whether the table has a name column.
    pub has_names: bool,
    /// The column headings.
    pub headings: Vec<Heading>,
    /// The rows, in the chosen order.
    pub lines: Vec<AreaLine>,
    /// The current order as a query string, for the JSON link (empty for the default).
    pub query: String,
}

fn reading(flag: &str) -> &'static str {
    match flag {
        "higher" => "higher than the indicators predict",
        "lower" => "lower than the indicators predict",
        "within" => "within its interval",
        _ => "no interval (undefined)",
    }
}

impl AreasPage {
    /// Builds the page from a document whose rows are already in `order`.
    pub fn build(analysis: &Analysis, doc: &AreasDocument, order: Order, shared: bool) -> Self {
        let glossary = analysis.glossary();
        let areas = glossary.areas().to_owned();
        let response = glossary.column(&analysis.spec().response);
        let has_names = doc.name_column.is_some();
        let higher = doc.rows.iter().filter(|r| r.flag == "higher").count();
        let lower = doc.rows.iter().filter(|r| r.flag == "lower").count();
        let chance = format!(
            "{flagged} of the {n} {areas} in the model lie outside their interval ({higher} higher and {lower} lower \
             than the indicators predict). Even when the model is right, about 5% of {areas} fall outside by chance: \
             with {n} {areas}, about {expected} (n/20). A count near that is what chance alone gives, so a flag is a \
             prompt to look at the {singular}'s data and circumstances, not a finding about it.",
            flagged = doc.flagged,
            n = doc.n,
            expected = fmt_num(doc.expected_by_chance),
            singular = glossary.area(),
        );
        let t_critical = figure_of(doc.t_critical);
        let method = format!(
            "For each {singular}, the model is fitted again without it, and the interval is where that model expects \
             the {singular}'s value 95 times out of 100: centred on ŷ₍ᵢ₎ = yᵢ − eᵢ/(1 − hᵢ), half-width \
             t(0.975, {df}) × s₍ᵢ₎/√(1 − hᵢ), where s₍ᵢ₎ is the residual standard deviation without the {singular} and \
             t(0.975, {df}) = {t}. The observed value lies outside exactly when the studentized deleted residual is \
             beyond ±{t}.",
            singular = glossary.area(),
            df = doc.df,
            t = t_critical.text,
        );
        let mut notes = Vec::new();
        if doc.weighted {
            notes.push(format!(
                "The model is weighted, so each interval uses its {singular}'s weight wᵢ: the half-width is \
                 t × s₍ᵢ₎/√(wᵢ(1 − hᵢ)), the prediction interval of a new {singular} with that weight; the flag rule \
                 |tᵢ| > t holds unchanged.",
                singular = glossary.area()
            ));
        }
        if doc.response != analysis.spec().response {
            notes.push(format!(
                "The model works on {}, so observed, predicted and interval values are on that scale.",
                doc.response
            ));
        }
        let linear = analysis.spec().response_transform.is_none();
        let below_zero =
            doc.rows.iter().flat_map(|r| [Some(r.predicted), r.low.as_f64(), r.high.as_f64()]).flatten();
        if linear && any_negative(below_zero) {
            notes.push(NEGATIVE_PREDICTION.to_owned());
        }
        let unit = response.unit.clone().unwrap_or_default();
        let mut by_prediction: Vec<&AreaRow> = doc.rows.iter().collect();
        by_prediction.sort_by(|a, b| a.predicted.total_cmp(&b.predicted).then_with(|| a.key.cmp(&b.key)));
        let strip = IntervalStrip {
            title: format!("Observed against expected, {areas} ordered by prediction"),
            axis: Axis::new(
                if doc.response == analysis.spec().response {
                    response.label.clone()
                } else {
                    doc.response.clone()
                },
                unit,
            ),
            items: areas.clone(),
            rows: by_prediction
                .iter()
                .map(|r| StripRow {
                    label: r.key.clone(),
                    observed: r.observed,
                    predicted: r.predicted,
                    low: r.low.as_f64().unwrap_or(f64::NAN),
                    high: r.high.as_f64().unwrap_or(f64::NAN),
                    emphasis: if r.flag == "higher" || r.flag == "lower" {
                        Emphasis::Flagged
                    } else {
                        Emphasis::Normal
                    },
                })
                .collect(),
            interval_name: format!("95% interval without the {}", glossary.area()),
            flagged_meaning: "Outside its interval".into(),
            summary: format!("{} of {} lie outside their interval.", doc.flagged, doc.n),
        };
        let chart_svg = match strip.render() {
            Ok(svg) => Some(svg),
            Err(e) => {
                tracing::warn!(error = %e, "the areas chart could not be drawn");
                None
            }
        };
        let headings = SORT_KEYS
            .iter()
            .filter(|(key, ..)| has_names || *key != SortKey::Name)
            .map(|&(key, name, label)| {
                let current = order.key == key;
                let next_desc = current && !order.descending;
                let sorted = match (current, order.descending) {
                    (false, _) => "",
                    (true, false) => "ascending",
                    (true, true) => "descending",
                };
                Heading {
                    label,
                    href: format!(
                        "/analyses/{}/areas?sort={name}&dir={}",
                        analysis.id(),
                        if next_desc { "desc" } else { "asc" }
                    ),
                    sorted,
                    hint: format!(
                        "Sort by {}, {}",
                        label.to_lowercase(),
                        if next_desc { "largest first" } else { "smallest first" }
                    ),
                }
            })
            .collect();
        let lines = doc
            .rows
            .iter()
            .map(|r| AreaLine {
                key: r.key.clone(),
                name: r.name.clone().unwrap_or_default(),
                observed: figure(r.observed),
                predicted: figure(r.predicted),
                residual: figure(r.residual),
                t: figure_of(r.studentized_deleted),
                leverage: figure(r.leverage),
                low: figure_of(r.low),
                high: figure_of(r.high),
                flag: r.flag.clone(),
                reading: reading(&r.flag).to_owned(),
            })
            .collect();
        let query = if order == Order::default() {
            String::new()
        } else {
            let name = SORT_KEYS.iter().find(|(k, ..)| *k == order.key).map_or("key", |(_, n, _)| *n);
            format!("sort={name}&dir={}", if order.descending { "desc" } else { "asc" })
        };
        AreasPage {
            layout: Layout::analysis(
                format!("Areas · {}", analysis.name()),
                shared,
                analysis.id(),
                analysis.name(),
                Section::Areas,
            ),
            id: analysis.id().to_owned(),
            lede: format!(
                "For each of the {} {areas} in the model: observed {} against what the indicators predict.",
                doc.n,
                in_sentence(&response.label)
            ),
            areas,
            chance,
            method,
            t_critical,
            notes,
            chart_svg,
            has_names,
            headings,
            lines,
            query,
        }
    }
}

/// A rough singular of the plural noun for areas ("districts" → "district").
/// `GET /analyses/{id}/areas`: the page.
pub async fn page(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    Query(pairs): Query<Vec<(String, String)>>,
) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let order = order_from_query(&pairs, name_column(&analysis).is_some())?;
    let mut doc = areas_document(&analysis)?;
    sort_rows(&mut doc.rows, order);
    Ok(render(&AreasPage::build(&analysis, &doc, order, ctx.shared())))
}

/// `GET /api/analyses/{id}/areas`: the areas document.
pub async fn api(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    Query(pairs): Query<Vec<(String, String)>>,
) -> std::result::Result<Json<AreasDocument>, ApiError> {
    let analysis = ctx.analysis(&id)?;
    let order = order_from_query(&pairs, name_column(&analysis).is_some())?;
    let mut doc = areas_document(&analysis)?;
    if !pairs.is_empty() {
        sort_rows(&mut doc.rows, order);
    }
    Ok(Json(doc))
}

//! The Soundness page: every diagnostic as a chart with its verdict, flagged areas and refits without them.
//!
//! Routes:
//!
//! - `GET /analyses/{id}/soundness`: the verdict overview in words, then each check beside its
//!   chart (residuals against fitted values, normal quantiles, added-variable and
//!   component-plus-residual plots, the influence map), the flagged areas with a refit
//!   comparison and an exclusion form each, collinearity tables and the transformation search.
//! - `GET /analyses/{id}/soundness/without?key=…`: the model with and without one area, side
//!   by side. It computes a comparison and changes nothing, so it is a GET.
//! - `GET /api/analyses/{id}/checks`: the checks document, exactly as `wardcast check` prints it.
//! - `GET /api/analyses/{id}/soundness/without?key=…`: the comparison as JSON.
//! - `POST /analyses/{id}/soundness/transform`: runs the transformation search again with other
//!   settings as a background job; 303 to its progress page `/jobs/{job}`.
//! - `GET /analyses/{id}/soundness/transform?job=…`: that job's ranked table (stable URL).
//! - `POST /api/analyses/{id}/soundness/transform`: the same from JSON options; 202 with the job
//!   document, whose `result` (at `/api/jobs/{job}`) holds the search once done.
//!
//! Every number on the page comes from the cached [`ChecksDocument`] (or, for the comparison,
//! from the two fit documents) and carries its full-precision value in `<data value>`.

mod charts;
mod transform;
mod without;

use askama::Template;
use axum::Json;
use axum::Router;
use axum::extract::{Path, State};
use axum::response::Response;
use axum::routing::{get, post};
use wardcast_contract::checks::{
    ChecksDocument, InfluenceDoc, InfluenceRowDoc, NamedOutcome, Outcome, SearchDoc, VerdictDoc,
};
use wardcast_contract::numbers::Number;

use super::Ctx;
use super::effects::Figure;
use super::pages::{Layout, Section, html, page_key, render_string, section_href};
use super::state::Analysis;
use super::words::{fmt_num, fmt_p, fmt_prose};
use crate::error::{ApiError, Result};

/// The routes of this page and its JSON twins.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
        .route("/analyses/{id}/soundness", get(page))
        .route("/analyses/{id}/soundness/without", get(without::page))
        .route("/api/analyses/{id}/checks", get(checks_json))
        .route("/api/analyses/{id}/soundness/without", get(without::json))
        .route("/analyses/{id}/soundness/transform", get(transform::page).post(transform::form_start))
        .route("/api/analyses/{id}/soundness/transform", post(transform::api_start))
}

/// One verdict as shown: level, test, numbers, threshold and sentence.
#[derive(Debug, Clone)]
pub struct VerdictView {
    /// `clear`, `watch` or `problem` (a CSS class too).
    pub level: String,
    /// The level in words.
    pub level_text: String,
    /// The test or measure.
    pub test: String,
    /// The statistic.
    pub statistic: Figure,
    /// The p-value, when the verdict comes from a test.
    pub p: Option<Figure>,
    /// The threshold in words.
    pub threshold: String,
    /// One sentence.
    pub meaning: String,
}

impl VerdictView {
    fn from_doc(v: &VerdictDoc) -> Self {
        let p = v.p_value.as_f64();
        VerdictView {
            level: v.level.clone(),
            level_text: level_words(&v.level).to_owned(),
            test: v.test.clone(),
            statistic: Figure::from_number(v.statistic),
            p: p.map(Figure::new),
            threshold: v.threshold.clone(),
            meaning: v.meaning.clone(),
        }
    }
}

/// The level of a verdict in words.
fn level_words(level: &str) -> &'static str {
    match level {
        "clear" => "Clear",
        "watch" => "Worth a look",
        "problem" => "Speaks against",
        "untested" => "Not tested",
        _ => "Not available",
    }
}

/// How bad a level is, for picking the worst of several.
fn severity(level: &str) -> u8 {
    match level {
        "problem" => 3,
        "watch" => 2,
        "clear" => 1,
        _ => 0,
    }
}

/// One assumption of the overview with the verdicts behind it.
#[derive(Debug, Clone)]
pub struct Assumption {
    /// The assumption in plain words.
    pub name: String,
    /// The anchor of its section on the page.
    pub anchor: String,
    /// The worst level of its verdicts, `untested` or `unavailable`.
    pub level: String,
    /// That level in words.
    pub level_text: String,
    /// The verdicts.
    pub verdicts: Vec<VerdictView>,
    /// Checks that could not be computed, each with its reason.
    pub unavailable: Vec<String>,
    /// A sentence shown when there is no test (the independence caveat).
    pub caveat: String,
}

impl Assumption {
    fn new(name: &str, anchor: &str) -> Self {
        Assumption {
            name: name.into(),
            anchor: anchor.into(),
            level: "unavailable".into(),
            level_text: level_words("unavailable").into(),
            verdicts: Vec::new(),
            unavailable: Vec::new(),
            caveat: String::new(),
        }
    }

    /// Adds a check: its verdict, or the reason it is missing.
    fn add<T>(&mut self, what: &str, outcome: &Outcome<T>, verdict: impl Fn(&T) -> &VerdictDoc) {
        match outcome {
            Outcome::Ok { result } => self.verdicts.push(VerdictView::from_doc(verdict(result))),
            Outcome::Unavailable { reason } => self.unavailable.push(format!("{what}: {reason}.")),
        }
        self.settle();
    }

    fn settle(&mut self) {
        if let Some(worst) = self.verdicts.iter().max_by_key(|v| severity(&v.level)) {
            self.level = worst.level.clone();
            self.level_text = level_words(&self.level).to_owned();
        }
    }
}

/// A chart as inline SVG (from `wardcast_report`, already escaped) with a caption.
#[derive(Debug, Clone)]
pub struct ChartView {
    /// The SVG document.
    pub svg: String,
    /// A caption under the chart.
    pub caption: String,
}

/// A chart about one model term, or the reason it is missing.
#[derive(Debug, Clone)]
pub struct TermChart {
    /// The design column.
    pub term: String,
    /// The chart, when drawn.
    pub chart: Option<ChartView>,
    /// The slope or coefficient shown by the reference line.
    pub coefficient: Option<Figure>,
    /// Why the chart is missing, when it is.
    pub missing: String,
}

/// One flagged area.
#[derive(Debug, Clone)]
pub struct FlaggedRow {
    /// The region key (user data; escaped on output).
    pub key: String,
    /// The key percent-encoded for a query string.
    pub key_query: String,
    /// Why it is flagged, one phrase per measure.
    pub reasons: Vec<String>,
    /// Leverage.
    pub hat: Figure,
    /// Cook's distance.
    pub cooks_d: Figure,
    /// Cook's distance as a percentile of F(p, n − p), in percent.
    pub cooks_pct: Figure,
    /// DFFITS.
    pub dffits: Figure,
    /// Studentized deleted residual.
    pub student: Figure,
    /// Bonferroni-adjusted outlier p-value.
    pub bonferroni: Figure,
}

/// A variance inflation factor with a plain reading.
#[derive(Debug, Clone)]
pub struct VifRow {
    /// Column.
    pub name: String,
    /// The VIF.
    pub vif: Figure,
    /// R² of the column on the others.
    pub r_squared: Figure,
    /// The reading.
    pub reading: String,
}

/// One component of the condition diagnostics.
#[derive(Debug, Clone)]
pub struct ConditionRow {
    /// The condition index.
    pub index: Figure,
    /// Whether the index is 30 or more.
    pub high: bool,
    /// The proportion per column, each with whether it is highlighted (> 0.5 on a high index).
    pub proportions: Vec<(Figure, bool)>,
}

/// A Box-Tidwell row.
#[derive(Debug, Clone)]
pub struct BoxTidwellRow {
    /// The column.
    pub name: String,
    /// The result, or the reason it is missing.
    pub result: std::result::Result<BoxTidwellView, String>,
}

/// A computed Box-Tidwell estimate.
#[derive(Debug, Clone)]
pub struct BoxTidwellView {
    /// The iterated power.
    pub estimate: Figure,
    /// Whether the iteration converged.
    pub converged: bool,
    /// The score test's t.
    pub score_t: Figure,
    /// Its p-value.
    pub score_p: Figure,
    /// The verdict.
    pub verdict: VerdictView,
}

/// The Box-Cox (or Yeo-Johnson) profile of the response power.
#[derive(Debug, Clone)]
pub struct PowerView {
    /// Which family.
    pub family: String,
    /// λ̂.
    pub lambda_hat: Figure,
    /// Interval ends.
    pub low: Figure,
    /// Interval ends.
    pub high: Figure,
    /// The nearest interpretable power inside the interval, in words.
    pub suggested: String,
    /// The verdict.
    pub verdict: VerdictView,
    /// The profile chart.
    pub chart: Option<ChartView>,
}

/// One candidate of the transformation search.
#[derive(Debug, Clone)]
pub struct CandidateRow {
    /// Rank.
    pub rank: usize,
    /// Label.
    pub label: String,
    /// Whether this is the model as specified.
    pub current: bool,
    /// Cross-validated RMSE.
    pub cv_rmse: Figure,
    /// R² of the candidate on all rows (top candidates only).
    pub r_squared: Option<Figure>,
    /// Shapiro-Wilk p of the candidate (top candidates only).
    pub shapiro_p: Option<Figure>,
    /// Breusch-Pagan p (top candidates only).
    pub bp_p: Option<Figure>,
    /// A note, e.g. why the RMSE is missing.
    pub note: String,
}

/// The candidates of a search as table rows: the first `shown` (plus the model as specified,
/// always, for comparison) and the rest.
pub(crate) fn candidate_rows(search: &SearchDoc, shown: usize) -> (Vec<CandidateRow>, Vec<CandidateRow>) {
    let mut top: Vec<CandidateRow> = search
        .candidates
        .iter()
        .map(|c| CandidateRow {
            rank: c.rank,
            label: c.label.clone(),
            current: c.current,
            cv_rmse: Figure::from_number(c.cv_rmse),
            r_squared: c.summary.as_ref().map(|s| Figure::new(s.r_squared)),
            shapiro_p: c.summary.as_ref().map(|s| Figure::from_number(s.shapiro_p)),
            bp_p: c.summary.as_ref().map(|s| Figure::from_number(s.breusch_pagan_p)),
            note: c.note.clone().unwrap_or_default(),
        })
        .collect();
    let mut rest = top.split_off(top.len().min(shown));
    if let Some(i) = rest.iter().position(|c| c.current) {
        top.push(rest.remove(i));
    }
    (top, rest)
}

/// The Soundness page.
#[derive(Debug, Template)]
#[template(path = "soundness.html")]
pub struct SoundnessPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id.
    pub id: String,
    /// The plural noun for the areas.
    pub areas: String,
    /// Rows and coefficients, in words.
    pub lede: String,
    /// The significance threshold.
    pub alpha: String,
    /// The assumptions with their verdicts.
    pub overview: Vec<Assumption>,
    /// Residuals against fitted values.
    pub resid_chart: Option<ChartView>,
    /// Normal quantile plot.
    pub qq_chart: Option<ChartView>,
    /// Shapiro-Wilk W and p, when computed.
    pub shapiro: Option<(Figure, Figure)>,
    /// Added-variable plots.
    pub added_variable: Vec<TermChart>,
    /// Component-plus-residual plots.
    pub component: Vec<TermChart>,
    /// The influence map.
    pub influence_chart: Option<ChartView>,
    /// Influence cut-offs in words.
    pub influence_rule: String,
    /// Flagged areas.
    pub flagged: Vec<FlaggedRow>,
    /// Variance inflation factors.
    pub vifs: Vec<VifRow>,
    /// Columns of the condition table.
    pub condition_names: Vec<String>,
    /// Condition indices with proportions.
    pub condition: Vec<ConditionRow>,
    /// Whether any proportion is highlighted.
    pub condition_any_high: bool,
    /// Response power profile.
    pub power: Option<PowerView>,
    /// Why the profile is missing.
    pub power_missing: String,
    /// Box-Tidwell per predictor.
    pub box_tidwell: Vec<BoxTidwellRow>,
    /// The search criterion.
    pub search_criterion: String,
    /// The first candidates of the search.
    pub search_top: Vec<CandidateRow>,
    /// The other candidates.
    pub search_rest: Vec<CandidateRow>,
    /// Notes of the search.
    pub search_notes: Vec<String>,
    /// Why the search is missing.
    pub search_missing: String,
    /// The form that runs the search again with other settings, at the defaults.
    pub search_form: transform::TransformForm,
}

/// A condition index from which a near-dependency can harm the estimates, and the variance
/// proportion above which a coefficient is tied to it (Belsley, Kuh & Welsch 1980, ch. 3).
const HIGH_INDEX: f64 = 30.0;
const HIGH_PROPORTION: f64 = 0.5;

/// How many candidates of the search are shown before the rest are folded away.
const SEARCH_SHOWN: usize = 10;

/// The reading of one VIF: Kutner et al. (2004) call above 10 serious; above 5 is common
/// practice for "worth watching".
fn vif_reading(v: Number) -> String {
    match v.as_f64() {
        Some(x) if x > 10.0 => "Strong overlap: this coefficient is poorly determined".into(),
        Some(x) if x > 5.0 => "Some overlap: worth watching".into(),
        Some(_) => "Little overlap".into(),
        None => match v {
            Number::PosInfinity => "An exact combination of the others".into(),
            _ => "Undefined".into(),
        },
    }
}

/// The interpretable power in words.
fn power_words(p: f64) -> String {
    let names = [
        (-1.0, "−1, the reciprocal"),
        (-0.5, "−½, the reciprocal square root"),
        (0.0, "0, the logarithm"),
        (0.5, "½, the square root"),
        (1.0, "1, no transformation"),
    ];
    names.iter().find(|(v, _)| (*v - p).abs() < 1e-9).map_or_else(|| fmt_prose(p), |(_, w)| (*w).to_owned())
}

/// Percent-encodes a query value (RFC 3986 unreserved characters are kept).
pub(crate) fn query_value(raw: &str) -> String {
    let mut out = String::with_capacity(raw.len());
    for b in raw.bytes() {
        if b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.' | b'~') {
            out.push(char::from(b));
        } else {
            out.push_str(&format!("%{b:02X}"));
        }
    }
    out
}

fn flag_reasons(r: &InfluenceRowDoc, inf: &InfluenceDoc) -> Vec<String> {
    let t = &inf.thresholds;
    let mut out = Vec::new();
    if r.hat_flag {
        out.push(format!("leverage {} above 2p/n = {}", fmt_num(r.hat), fmt_num(t.hat)));
    }
    if r.cooks_band.as_deref() == Some("major") {
        let pct = r.cooks_percentile.as_f64().map_or_else(|| "undefined".into(), |q| fmt_prose(q * 100.0));
        out.push(format!(
            "Cook's distance at the {pct}th percentile of F(p, n − p), at or above the {}th",
            fmt_prose(t.cook_major * 100.0)
        ));
    }
    if r.dffits_flag {
        out.push(format!("|DFFITS| above {}", fmt_num(t.dffits)));
    }
    if r.dfbetas_flag {
        let over: Vec<&str> = inf
            .names
            .iter()
            .zip(&r.dfbetas)
            .filter(|(_, b)| b.as_f64().is_some_and(|b| b.abs() > t.dfbetas))
            .map(|(n, _)| n.as_str())
            .collect();
        out.push(format!("|DFBETAS| above {} for {}", fmt_num(t.dfbetas), over.join(", ")));
    }
    if r.outlier_flag {
        out.push(format!(
            "outlier test: Bonferroni-adjusted {}, below {}",
            fmt_p(r.outlier_p_bonferroni.as_f64()),
            t.bonferroni_alpha
        ));
    }
    out
}

fn term_charts<T>(
    items: &[NamedOutcome<T>],
    draw: impl Fn(&str, &T) -> Option<ChartView>,
    coefficient: impl Fn(&T) -> f64,
) -> Vec<TermChart> {
    items
        .iter()
        .map(|n| match &n.check {
            Outcome::Ok { result } => TermChart {
                term: n.name.clone(),
                chart: draw(&n.name, result),
                coefficient: Some(Figure::new(coefficient(result))),
                missing: String::new(),
            },
            Outcome::Unavailable { reason } => TermChart {
                term: n.name.clone(),
                chart: None,
                coefficient: None,
                missing: format!("Not available: {reason}."),
            },
        })
        .collect()
}

impl SoundnessPage {
    /// Builds the page from an analysis and its checks document.
    pub fn build(analysis: &Analysis, doc: &ChecksDocument, shared: bool) -> Self {
        let glossary = analysis.glossary();
        let areas = glossary.areas().to_owned();
        let response = glossary.column(&doc.spec.response);
        let charts = charts::Charts { areas: &areas, response: &response, doc };
        let flagged_keys: Vec<String> = match &doc.influence {
            Outcome::Ok { result } => result.flagged.clone(),
            Outcome::Unavailable { .. } => Vec::new(),
        };

        let mut overview = Vec::new();
        let mut linearity =
            Assumption::new("The indicators relate to the outcome along straight lines", "linearity");
        linearity.add("RESET", &doc.linearity.reset, |r| &r.verdict);
        overview.push(linearity);
        let mut spread = Assumption::new("The spread around the model is the same everywhere", "spread");
        spread.add("Brown-Forsythe", &doc.constant_variance.brown_forsythe, |r| &r.verdict);
        spread.add("Breusch-Pagan (predictors)", &doc.constant_variance.breusch_pagan_predictors, |r| {
            &r.verdict
        });
        spread.add("Breusch-Pagan (fitted values)", &doc.constant_variance.breusch_pagan_fitted, |r| {
            &r.verdict
        });
        spread.add("Robust standard errors", &doc.robust_errors, |r| &r.verdict);
        overview.push(spread);
        let mut normal = Assumption::new("The residuals follow a normal shape", "normality");
        normal.add("Shapiro-Wilk", &doc.normality.shapiro_wilk, |r| &r.verdict);
        overview.push(normal);
        let mut independent =
            Assumption::new("The areas' residuals are independent of each other", "independence");
        independent.level = "untested".into();
        independent.level_text = level_words("untested").into();
        independent.caveat = format!(
            "No test is run. Neighbouring {areas} share streets, services and reporting practices, so their \
             residuals may move together; if they do, the intervals are narrower than they should be. Look at \
             the residuals on a map of the {areas} before relying on the intervals."
        );
        overview.push(independent);
        let mut influence = Assumption::new("No single area steers the model", "influence");
        influence.add("Influence measures", &doc.influence, |r| &r.verdict);
        overview.push(influence);
        let mut collinear = Assumption::new("The indicators do not overlap too much", "collinearity");
        collinear.add("Variance inflation factors", &doc.collinearity.vif, |r| &r.verdict);
        collinear.add("Condition indices", &doc.collinearity.condition, |r| &r.verdict);
        overview.push(collinear);
        let mut rows = Assumption::new("There are enough areas per indicator", "rows");
        rows.add("Rows per predictor", &doc.rows_guard, |r| &r.verdict);
        overview.push(rows);

        let shapiro = match &doc.normality.shapiro_wilk {
            Outcome::Ok { result } => Some((Figure::new(result.w), Figure::new(result.p_value))),
            Outcome::Unavailable { .. } => None,
        };

        let added_variable = term_charts(
            &doc.linearity.added_variable,
            |name, av| charts.added_variable(name, av, &flagged_keys),
            |av| av.coefficient,
        );
        let component = term_charts(
            &doc.linearity.component_residual,
            |name, cr| charts.component(name, cr, &flagged_keys),
            |cr| cr.coefficient,
        );

        let (influence_chart, influence_rule, flagged) = match &doc.influence {
            Outcome::Ok { result } => {
                let rows = result
                    .rows
                    .iter()
                    .filter(|r| r.flagged)
                    .map(|r| FlaggedRow {
                        key: r.key.clone(),
                        key_query: query_value(&r.key),
                        reasons: flag_reasons(r, result),
                        hat: Figure::new(r.hat),
                        cooks_d: Figure::from_number(r.cooks_d),
                        cooks_pct: Figure::from_number(match r.cooks_percentile {
                            Number::Finite(q) => Number::Finite(q * 100.0),
                            other => other,
                        }),
                        dffits: Figure::from_number(r.dffits),
                        student: Figure::from_number(r.studentized_deleted),
                        bonferroni: Figure::from_number(r.outlier_p_bonferroni),
                    })
                    .collect();
                (charts.influence(result), result.thresholds.size_rule.clone(), rows)
            }
            Outcome::Unavailable { .. } => (None, String::new(), Vec::new()),
        };

        let vifs = match &doc.collinearity.vif {
            Outcome::Ok { result } => result
                .entries
                .iter()
                .map(|e| VifRow {
                    name: e.name.clone(),
                    vif: Figure::from_number(e.vif),
                    r_squared: Figure::new(e.r_squared),
                    reading: vif_reading(e.vif),
                })
                .collect(),
            Outcome::Unavailable { .. } => Vec::new(),
        };
        let (condition_names, condition) = match &doc.collinearity.condition {
            Outcome::Ok { result } => (
                result.names.clone(),
                result
                    .indices
                    .iter()
                    .zip(&result.proportions)
                    .map(|(&index, props)| ConditionRow {
                        index: Figure::new(index),
                        high: index >= HIGH_INDEX,
                        proportions: props
                            .iter()
                            .map(|&q| (Figure::new(q), index >= HIGH_INDEX && q > HIGH_PROPORTION))
                            .collect(),
                    })
                    .collect(),
            ),
            Outcome::Unavailable { .. } => (Vec::new(), Vec::new()),
        };
        let condition_any_high = condition.iter().any(|r: &ConditionRow| r.proportions.iter().any(|p| p.1));

        let (power, power_missing) = match &doc.transformations.response_power {
            Outcome::Ok { result } => (
                Some(PowerView {
                    family: if result.family == "box_cox" { "Box-Cox" } else { "Yeo-Johnson" }.into(),
                    lambda_hat: Figure::new(result.lambda_hat),
                    low: Figure::from_number(result.interval_low),
                    high: Figure::from_number(result.interval_high),
                    suggested: result.suggested.as_f64().map_or_else(
                        || "none of −1, −½, 0, ½ or 1 lies inside the interval".into(),
                        power_words,
                    ),
                    verdict: VerdictView::from_doc(&result.verdict),
                    chart: charts.power(result),
                }),
                String::new(),
            ),
            Outcome::Unavailable { reason } => (None, format!("Not available: {reason}.")),
        };
        let box_tidwell = doc
            .transformations
            .box_tidwell
            .iter()
            .map(|b| BoxTidwellRow {
                name: b.name.clone(),
                result: match &b.check {
                    Outcome::Ok { result } => Ok(BoxTidwellView {
                        estimate: Figure::new(result.estimate),
                        converged: result.converged,
                        score_t: Figure::new(result.score_t),
                        score_p: Figure::new(result.score_p_value),
                        verdict: VerdictView::from_doc(&result.verdict),
                    }),
                    Outcome::Unavailable { reason } => Err(reason.clone()),
                },
            })
            .collect();
        let (search_criterion, search_top, search_rest, search_notes, search_missing) =
            match &doc.transformations.search {
                Outcome::Ok { result } => {
                    let (top, rest) = candidate_rows(result, SEARCH_SHOWN);
                    (result.criterion.clone(), top, rest, result.notes.clone(), String::new())
                }
                Outcome::Unavailable { reason } => {
                    (String::new(), Vec::new(), Vec::new(), Vec::new(), format!("Not available: {reason}."))
                }
            };

        SoundnessPage {
            layout: Layout::analysis(
                format!("Soundness · {}", analysis.name()),
                shared,
                analysis.id(),
                analysis.name(),
                Section::Soundness,
            ),
            id: analysis.id().to_owned(),
            lede: format!(
                "Whether the model's assumptions hold across its {} {areas} and {} coefficients, each check \
                 with its verdict, test and threshold.",
                doc.rows_used, doc.coefficients
            ),
            areas: areas.clone(),
            alpha: fmt_prose(doc.alpha),
            overview,
            resid_chart: charts.residuals(&flagged_keys),
            qq_chart: charts.qq(&flagged_keys),
            shapiro,
            added_variable,
            component,
            influence_chart,
            influence_rule,
            flagged,
            vifs,
            condition_names,
            condition,
            condition_any_high,
            power,
            power_missing,
            box_tidwell,
            search_criterion,
            search_top,
            search_rest,
            search_notes,
            search_missing,
            search_form: transform::TransformForm::defaults(),
        }
    }

    /// The Data page of this analysis, where a transformation is chosen.
    pub fn data_href(&self) -> String {
        section_href(&self.id, Section::Data)
    }
}

/// `GET /analyses/{id}/soundness`: the Soundness page.
pub async fn page(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    let (analysis, checked) = ctx.checked(&id).await?;
    let shared = ctx.shared();
    // The page depends only on the immutable analysis and the frame flags in the key; a room
    // full of browsers costs one render.
    let text = analysis.cached_page(&page_key("soundness", shared), || {
        render_string(&SoundnessPage::build(&analysis, &checked.document, shared))
    })?;
    Ok(html(&text))
}

/// `GET /api/analyses/{id}/checks`: the checks document, exactly as `wardcast check` prints it.
pub async fn checks_json(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
) -> std::result::Result<Json<ChecksDocument>, ApiError> {
    let (_, checked) = ctx.checked(&id).await?;
    Ok(Json(checked.document.clone()))
}

//! The Effects page: what a fitted model says, led by each indicator's effect with its interval
//! written as a comparison between areas, then how well the model fits, explained in words.
//!
//! The page is built from the same [`FitDocument`] the JSON API serves, so every number on it
//! can be checked against `/api/analyses/{id}/fit`. Each figure carries its full-precision
//! value in a `data-value` attribute for that purpose.

use askama::Template;
use axum::extract::{Path, State};
use axum::response::Response;
use wardcast_contract::checks::{ChecksDocument, Outcome};
use wardcast_contract::fit::{CoefficientDoc, FitDocument};
use wardcast_contract::numbers::Number;
use wardcast_contract::spec::TransformSpec;
use wardcast_engine::dist;
use wardcast_report::svg::{Axis, Chart, EffectPlot, EffectRow as PlotRow};

use super::Ctx;
use super::pages::{Layout, Section, html, page_key, render_string};
use super::state::Analysis;
use super::words::{
    Estimate, TermKind, Wording, capitalise, classify_terms, comparison_label, comparison_scale,
    comparison_sentence, fmt_level, fmt_num, fmt_p, fmt_prose, in_sentence,
};
use crate::error::Result;

/// A number as shown (rounded) and as computed (full precision, for `data-value`).
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// The rounded text.
    pub text: String,
    /// The value with full precision, or empty when undefined.
    pub raw: String,
}

impl Figure {
    /// A finite or non-finite number, rounded for display.
    pub(crate) fn new(x: f64) -> Self {
        Figure { text: fmt_num(x), raw: if x.is_finite() { format!("{x:?}") } else { String::new() } }
    }

    /// A contract number, which may be infinite or undefined.
    pub(crate) fn from_number(n: Number) -> Self {
        match n {
            Number::Finite(x) => Figure::new(x),
            Number::PosInfinity => Figure { text: "infinite".into(), raw: "Infinity".into() },
            Number::NegInfinity => Figure { text: "minus infinite".into(), raw: "-Infinity".into() },
            Number::Undefined => Figure { text: "undefined".into(), raw: String::new() },
        }
    }
}

/// One indicator's effect.
#[derive(Debug, Clone)]
pub struct EffectRow {
    /// The term as the model names it (`unemployment_pct`, `log(vacancy_pct)`, `type=mixed`).
    pub term: String,
    /// The comparison sentence.
    pub sentence: String,
    /// The coefficient.
    pub estimate: Figure,
    /// The interval's lower end.
    pub low: Figure,
    /// The interval's upper end.
    pub high: Figure,
    /// The classical standard error.
    pub std_error: Figure,
    /// The t statistic.
    pub t_value: Figure,
    /// The two-sided p-value, worded.
    pub p_text: String,
    /// Whether the interval includes zero.
    pub includes_zero: bool,
    /// The HC3 (heteroscedasticity-consistent) standard error and the interval built on it,
    /// when the checks could compute them.
    pub hc3: Option<RobustFigures>,
}

/// A coefficient's HC3 standard error with the interval `b ± t·se_HC3` at the model's level.
#[derive(Debug, Clone)]
pub struct RobustFigures {
    /// The HC3 standard error.
    pub std_error: Figure,
    /// The interval's lower end.
    pub low: Figure,
    /// The interval's upper end.
    pub high: Figure,
    /// HC3 over the classical standard error, worded (e.g. "1.42 times").
    pub ratio_text: String,
}

/// A fit statistic with its meaning in words.
#[derive(Debug, Clone)]
pub struct Fact {
    /// A short heading.
    pub heading: String,
    /// The headline figure.
    pub value: String,
    /// The figure's unit, shown smaller; empty when none.
    pub unit: String,
    /// One or two sentences saying what it means.
    pub explanation: String,
}

/// A row of the sequential ANOVA or partial F table.
#[derive(Debug, Clone)]
pub struct TestRow {
    /// The term.
    pub term: String,
    /// Degrees of freedom.
    pub df: usize,
    /// Sum of squares.
    pub sum_sq: Figure,
    /// F statistic.
    pub f: Figure,
    /// p-value, worded.
    pub p_text: String,
}

/// A row left out of the fit.
#[derive(Debug, Clone)]
pub struct DroppedRow {
    /// The area's key (user data; escaped on output).
    pub key: String,
    /// Why it was left out.
    pub reason: String,
}

/// The Effects page.
#[derive(Debug, Template)]
#[template(path = "effects.html")]
pub struct EffectsPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id (for links).
    pub id: String,
    /// The opening line.
    pub lede: String,
    /// The plural noun for the areas.
    pub areas: String,
    /// The interval level in percent, e.g. "95".
    pub level_pct: String,
    /// The effects, in spec order.
    pub effects: Vec<EffectRow>,
    /// The intercept, shown in the workings table only.
    pub intercept: Option<EffectRow>,
    /// What the intercept means, in words (empty without an intercept).
    pub intercept_text: String,
    /// The interval chart as inline SVG, when the chart module provides one.
    pub chart_svg: Option<String>,
    /// Fit statistics in words.
    pub facts: Vec<Fact>,
    /// Rows left out, with reasons.
    pub dropped: Vec<DroppedRow>,
    /// The sequential ANOVA table.
    pub anova: Vec<TestRow>,
    /// The partial F test of each term given the others.
    pub partial: Vec<TestRow>,
    /// Sums of squares: error, regression, total, and the basis of the total.
    pub sums: Vec<(String, Figure)>,
    /// The basis of the total sum of squares, in words.
    pub ss_basis: String,
    /// Engine notes (undefined values, conventions).
    pub notes: Vec<String>,
    /// The likelihood convention.
    pub likelihood_convention: String,
    /// What the HC3 standard errors say beside the classical ones; empty when they are not
    /// available (the reason is then in `robust_missing`).
    pub robust_note: String,
    /// Why the HC3 standard errors are missing, when they are.
    pub robust_missing: String,
}

fn p_of(n: Number) -> Option<f64> {
    n.as_f64()
}

fn test_rows(rows: &[wardcast_contract::fit::TermTest]) -> Vec<TestRow> {
    rows.iter()
        .map(|r| TestRow {
            term: r.term.clone(),
            df: r.df,
            sum_sq: Figure::new(r.sum_sq),
            f: Figure::from_number(r.f),
            p_text: fmt_p(p_of(r.p_value)),
        })
        .collect()
}

impl EffectsPage {
    /// Builds the page for an analysis.
    pub fn build(analysis: &Analysis, shared: bool) -> Self {
        let fit: &FitDocument = analysis.fit();
        let glossary = analysis.glossary();
        let spec = &fit.spec;
        let response = glossary.column(&spec.response);
        let areas = glossary.areas();
        let wording = Wording {
            glossary,
            response: &spec.response,
            response_transform: spec.response_transform,
            level: spec.level,
        };

        let has_intercept =
            spec.intercept && fit.coefficients.first().is_some_and(|c| c.term == "(intercept)");
        let slopes = if has_intercept { &fit.coefficients[1..] } else { &fit.coefficients[..] };
        let terms: Vec<String> = slopes.iter().map(|c| c.term.clone()).collect();
        let kinds = classify_terms(spec, &terms);
        let row = |c: &CoefficientDoc, kind: &TermKind| {
            let estimate = Estimate { value: c.estimate, low: c.interval.low, high: c.interval.high };
            EffectRow {
                term: c.term.clone(),
                sentence: comparison_sentence(kind, estimate, &wording),
                estimate: Figure::new(c.estimate),
                low: Figure::new(c.interval.low),
                high: Figure::new(c.interval.high),
                std_error: Figure::new(c.std_error),
                t_value: Figure::from_number(c.t_value),
                p_text: fmt_p(p_of(c.p_value)),
                includes_zero: c.interval.low <= 0.0 && c.interval.high >= 0.0,
                hc3: None,
            }
        };
        let effects = slopes.iter().zip(&kinds).map(|(c, k)| row(c, k)).collect();
        let chart_svg = effect_chart(slopes, &kinds, &wording, areas);
        let (intercept, intercept_text) = if has_intercept {
            let c = &fit.coefficients[0];
            let r = row(c, &TermKind::Other(c.term.clone()));
            let text = format!(
                "The model's value for an area with every indicator at zero is {} ({}% interval {} to {}). \
                 That point usually lies outside the data, so it anchors the effects above rather than \
                 describing any real area.",
                r.estimate.text,
                fmt_level(spec.level),
                r.low.text,
                r.high.text
            );
            (Some(r), text)
        } else {
            (None, String::new())
        };

        let n = fit.rows_used;
        let total = n + fit.rows_dropped.len();
        let unit = response
            .unit
            .as_deref()
            .map(str::trim)
            .filter(|u| !u.is_empty())
            .map(|u| if u.starts_with('%') { " percentage points".to_owned() } else { format!(" {u}") });
        let mut facts = vec![Fact {
            heading: format!("{} in the model", capitalise(areas)),
            value: format!("{n} of {total}"),
            unit: String::new(),
            explanation: match fit.rows_dropped.len() {
                0 => format!("Every one of the {total} {areas} in the table is used."),
                1 => {
                    format!("One of the {total} was left out; it is listed below with the reason.")
                }
                k => format!("{k} of the {total} were left out; each is listed below with its reason."),
            },
        }];
        let about = if fit.sums_of_squares.basis == "about_zero" {
            " Because the model has no intercept, this share is measured about zero rather than about the average, so it cannot be compared with models that have one."
        } else {
            ""
        };
        facts.push(Fact {
            heading: "Variation accounted for".into(),
            value: format!("{}%", fmt_prose(fit.r_squared * 100.0)),
            unit: String::new(),
            explanation: format!(
                "Across these {areas}, the indicators together account for {}% of the variation in {} \
                 (R² = {}; adjusted for the number of indicators, {}). A large share does not make the \
                 indicators causes.{about}",
                fmt_prose(fit.r_squared * 100.0),
                in_sentence(&response.label),
                fmt_num(fit.r_squared),
                fmt_num(fit.adj_r_squared)
            ),
        });
        facts.push(Fact {
            heading: "Typical distance from the model".into(),
            value: fmt_num(fit.residual_sd),
            unit: unit.clone().map(|u| u.trim().to_owned()).unwrap_or_default(),
            explanation: format!(
                "Observed values of {} typically lie about {}{} from the model's values \
                 (the residual standard deviation, on {} residual degrees of freedom).",
                in_sentence(&response.label),
                fmt_num(fit.residual_sd),
                unit.unwrap_or_default(),
                fit.df_residual
            ),
        });
        facts.push(overall_fact(fit, &in_sentence(&response.label)));
        facts.push(Fact {
            heading: "For comparing models".into(),
            value: format!("AIC {} · SBC {}", fmt_num(fit.likelihood.aic), fmt_num(fit.likelihood.sbc)),
            unit: String::new(),
            explanation: format!(
                "These two criteria mean something only next to another model fitted to the same {areas}: \
                 the lower value is preferred, and SBC penalises extra indicators more than AIC does \
                 (log-likelihood {}).",
                fmt_num(fit.likelihood.log_likelihood)
            ),
        });
        if let Some(w) = &spec.weights {
            let label = glossary.column(w).label;
            facts.push(Fact {
                heading: "Weighting".into(),
                value: label.clone(),
                unit: String::new(),
                explanation: format!(
                    "Each area counts in proportion to its {label} (weighted least squares), so areas with larger weights pull the model more."
                ),
            });
        }

        let ss = &fit.sums_of_squares;
        let ss_basis = if ss.basis == "about_zero" {
            "The total is taken about zero, because the model has no intercept.".to_owned()
        } else {
            "The total is taken about the mean of the response.".to_owned()
        };

        EffectsPage {
            layout: Layout::analysis(
                format!("Effects · {}", analysis.name()),
                shared,
                analysis.id(),
                analysis.name(),
                Section::Effects,
            ),
            id: analysis.id().to_owned(),
            areas: areas.to_owned(),
            lede: format!(
                "Comparisons of {} between {areas} that differ in the indicators, across {n} {areas}.",
                in_sentence(&response.label)
            ),
            level_pct: fmt_level(spec.level),
            effects,
            intercept,
            intercept_text,
            chart_svg,
            facts,
            dropped: fit
                .rows_dropped
                .iter()
                .map(|d| DroppedRow { key: d.key.clone(), reason: d.reason.clone() })
                .collect(),
            anova: test_rows(&fit.sequential_anova),
            partial: test_rows(&fit.partial_f),
            sums: vec![
                ("Error (SSE)".into(), Figure::new(ss.error)),
                ("Regression (SSR)".into(), Figure::new(ss.regression)),
                ("Total (SSTO)".into(), Figure::new(ss.total)),
            ],
            ss_basis,
            notes: fit.notes.clone(),
            likelihood_convention: fit.likelihood.convention.clone(),
            robust_note: String::new(),
            robust_missing: "The robust standard errors have not been computed for this page.".into(),
        }
    }

    /// Adds the HC3 standard errors of the checks document beside the classical ones, with
    /// intervals `b ± t_{1−α/2, n−p}·se_HC3` on the same critical value as the classical ones.
    pub fn with_robust(mut self, fit: &FitDocument, checks: &ChecksDocument) -> Self {
        let robust = match &checks.robust_errors {
            Outcome::Ok { result } => result,
            Outcome::Unavailable { reason } => {
                self.robust_missing = format!("Robust (HC3) standard errors are not available: {reason}.");
                return self;
            }
        };
        let level = fit.spec.level;
        let q = dist::t_isf(0.5 * (1.0 - level), fit.df_residual as f64);
        let attach = |row: &mut EffectRow| {
            let Some(r) = robust.coefficients.iter().find(|r| r.term == row.term) else {
                return;
            };
            let Some(c) = fit.coefficients.iter().find(|c| c.term == row.term) else {
                return;
            };
            let ratio = r.hc3 / r.classical;
            row.hc3 = Some(RobustFigures {
                std_error: Figure::new(r.hc3),
                low: Figure::new(c.estimate - q * r.hc3),
                high: Figure::new(c.estimate + q * r.hc3),
                ratio_text: if ratio.is_finite() {
                    format!("{} times", fmt_num(ratio))
                } else {
                    "undefined".into()
                },
            });
        };
        self.effects.iter_mut().for_each(attach);
        if let Some(i) = self.intercept.as_mut() {
            attach(i);
        }
        let largest = robust
            .coefficients
            .iter()
            .filter(|r| r.classical > 0.0 && r.hc3 > 0.0)
            .map(|r| r.hc3 / r.classical)
            .fold(1.0_f64, |m, x| if (x.ln()).abs() > m.ln().abs() { x } else { m });
        let material =
            !(1.0 / MATERIAL_RATIO..=MATERIAL_RATIO).contains(&largest) || robust.verdict.level == "problem";
        self.robust_note = format!(
            "HC3 standard errors (MacKinnon & White 1985) stay valid when the spread of the residuals \
             differs between {areas}; the classical ones assume it does not. They differ materially when \
             one is more than {} times the other, or when a conclusion changes. Here the ratio of HC3 to \
             classical furthest from 1 is {}, and the difference is {}. {}",
            fmt_prose(MATERIAL_RATIO),
            fmt_prose(largest),
            if material { "material: prefer the HC3 intervals" } else { "small" },
            robust.verdict.meaning,
            areas = self.areas,
        );
        self.robust_missing.clear();
        self
    }
}

/// HC3 and classical standard errors "differ materially" when their ratio leaves
/// [1/1.2, 1.2] (our rule of thumb, stated on the page).
const MATERIAL_RATIO: f64 = 1.2;

/// The interval chart: every effect on one axis, each scaled to the comparison its sentence
/// makes (the column's step, or a doubling for a logged indicator), so all rows share the
/// response's unit. A chart that cannot be drawn is left out and logged; the sentences and
/// tables still carry every number.
fn effect_chart(
    slopes: &[CoefficientDoc],
    kinds: &[TermKind],
    w: &Wording<'_>,
    areas: &str,
) -> Option<String> {
    if slopes.is_empty() {
        return None;
    }
    let response = w.glossary.column(w.response);
    let log_response = matches!(w.response_transform, Some(TransformSpec::Log))
        || matches!(w.response_transform, Some(TransformSpec::Power { lambda }) if lambda == 0.0);
    // Under a logged response a difference d is a ratio e^d, shown as a percentage difference.
    let shown = |d: f64| {
        if log_response { (d.exp() - 1.0) * 100.0 } else { d }
    };
    let rows = slopes
        .iter()
        .zip(kinds)
        .map(|(c, kind)| {
            let scale = comparison_scale(kind, w.glossary);
            PlotRow {
                label: comparison_label(kind, w.glossary),
                estimate: shown(c.estimate * scale),
                low: shown(c.interval.low * scale),
                high: shown(c.interval.high * scale),
            }
        })
        .collect();
    // The title names the response; the axis stays short enough to print whole.
    let axis = match w.response_transform {
        None => Axis::new(
            "Difference",
            match response.unit.as_deref().map(str::trim) {
                Some(u) if u.starts_with('%') => "percentage points".to_owned(),
                Some(u) => u.to_owned(),
                None => String::new(),
            },
        ),
        Some(_) if log_response => Axis::new("Difference in the typical value", "%"),
        Some(t) => Axis::new(format!("Difference in {}", super::words::transform_phrase(t)), ""),
    };
    let plot = EffectPlot {
        title: format!("Differences in {}", in_sentence(&response.label)),
        axis,
        rows,
        interval_name: format!("{}% interval", fmt_level(w.level)),
        reference: Some(0.0),
        reference_label: "No difference".into(),
        decimals: None,
        summary: format!(
            "Each row compares {areas} that differ in one indicator, by the amount in its label, \
             with the other indicators equal."
        ),
    };
    match plot.render() {
        Ok(svg) => Some(svg),
        Err(e) => {
            tracing::warn!(error = %e, "the effect chart could not be drawn");
            None
        }
    }
}

/// The global F test in words.
fn overall_fact(fit: &FitDocument, response: &str) -> Fact {
    let f = &fit.overall_f;
    let dfs = format!("on {} and {} degrees of freedom", f.df_model, f.df_residual);
    match (f.statistic, p_of(f.p_value)) {
        (Number::PosInfinity, _) => Fact {
            heading: "All indicators together".into(),
            value: "exact fit".into(),
            unit: String::new(),
            explanation: format!(
                "The model reproduces every value of {response} exactly, so the F statistic is infinite ({dfs}). \
                 With real area data this usually means a column restates the response."
            ),
        },
        (Number::Finite(stat), Some(p)) => {
            let verdict = if p < 0.05 {
                "a pattern this strong would rarely arise by chance"
            } else {
                "chance alone could plausibly produce a pattern this strong"
            };
            Fact {
                heading: "All indicators together".into(),
                value: fmt_p(Some(p)),
                unit: String::new(),
                explanation: format!(
                    "If none of the indicators were related to {response}, {verdict} \
                     (F = {}, {dfs}, {}).",
                    fmt_num(stat),
                    fmt_p(Some(p))
                ),
            }
        }
        _ => Fact {
            heading: "All indicators together".into(),
            value: "no test".into(),
            unit: String::new(),
            explanation: "The model has no indicators to test, so there is no overall F test.".into(),
        },
    }
}

/// `GET /analyses/{id}`: the Effects page.
pub async fn page(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    let (analysis, checked) = ctx.checked(&id).await?;
    let shared = ctx.shared();
    // The page depends only on the immutable analysis and the frame flags in the key.
    let text = analysis.cached_page(&page_key("effects", shared), || {
        render_string(&EffectsPage::build(&analysis, shared).with_robust(analysis.fit(), &checked.document))
    })?;
    Ok(html(&text))
}

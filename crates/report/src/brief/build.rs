//! Builds the eleven sections of the brief from the analysis documents.

use wardcast_contract::checks::{ChecksDocument, Outcome};
use wardcast_contract::dataset::{ColumnMeta, JoinKind};
use wardcast_contract::fit::{CoefficientDoc, FitDocument, PredictionDoc};
use wardcast_contract::spec::{PredictorSpec, TransformSpec};
use wardcast_engine::dist::t_quantile;

use super::text::{
    INTERVAL_MEANING, NEGATIVE_PREDICTION, OPTIMISTIC_P, any_negative, direction, fmt_amount, fmt_coef,
    fmt_fixed, fmt_p, fmt_share, fmt_sig, in_sentence, join_and, readable_step, step_words,
};
use super::{
    Block, Brief, BriefInput, CautionText, Cell, Figure, LIMITATIONS_HEADING, Limitations, Section,
    SectionKind, Table,
};
use crate::svg::{
    Axis, Chart, EffectPlot, EffectRow, PointLabels, QqLine, QqPlot, QqPoint, Reference, Scatter,
    ScatterPoint,
};
use crate::{ReportError, Result};

/// The references the brief cites, listed in the appendix (full entries are in docs/METHODS.md).
/// The entries are from memory; docs/METHODS.md is the checked list.
const REFERENCES: [&str; 8] = [
    "Robinson, W. S. (1950). Ecological correlations and the behavior of individuals. American Sociological Review 15(3), 351-357.",
    "Openshaw, S. (1984). The Modifiable Areal Unit Problem. Concepts and Techniques in Modern Geography 38. Norwich: Geo Books.",
    "Lum, K. & Isaac, W. (2016). To predict and serve? Significance 13(5), 14-19.",
    "Ensign, D., Friedler, S. A., Neville, S., Scheidegger, C. & Venkatasubramanian, S. (2018). Runaway feedback loops in predictive policing. Proceedings of Machine Learning Research 81, 160-171.",
    "MacKinnon, J. G. & White, H. (1985). Some heteroskedasticity-consistent covariance matrix estimators with improved finite sample properties. Journal of Econometrics 29(3), 305-325.",
    "Royston, P. (1995). Remark AS R94: A remark on Algorithm AS 181: The W-test for normality. Applied Statistics 44(4), 547-551.",
    "Belsley, D. A., Kuh, E. & Welsch, R. E. (1980). Regression Diagnostics. New York: Wiley.",
    "Cook, R. D. (1977). Detection of influential observation in linear regression. Technometrics 19(1), 15-18.",
];

/// What one design term refers to.
struct TermInfo {
    /// The readable label (from the column metadata).
    label: String,
    /// The unit of the column.
    unit: String,
    /// The predictor's transform.
    transform: Option<TransformSpec>,
    /// For a categorical term: the level and the reference level.
    level: Option<(String, String)>,
}

struct Ctx<'a> {
    input: &'a BriefInput,
    fit: &'a FitDocument,
    response_label: String,
    response_unit: String,
}

impl Ctx<'_> {
    fn meta(&self, column: &str) -> Option<&ColumnMeta> {
        self.input.columns.iter().find(|c| c.column == column)
    }

    fn label(&self, column: &str) -> String {
        self.meta(column)
            .and_then(|m| m.label.clone())
            .filter(|l| !l.trim().is_empty())
            .unwrap_or_else(|| column.to_owned())
    }

    fn unit(&self, column: &str) -> String {
        self.meta(column).and_then(|m| m.unit.clone()).unwrap_or_default()
    }

    fn term(&self, term: &str) -> TermInfo {
        for p in &self.fit.spec.predictors {
            if let Some(info) = self.match_term(p, term) {
                return info;
            }
        }
        TermInfo { label: term.to_owned(), unit: String::new(), transform: None, level: None }
    }

    fn match_term(&self, p: &PredictorSpec, term: &str) -> Option<TermInfo> {
        let label = self.label(&p.column);
        let unit = self.unit(&p.column);
        let engine_label = p.transform.map_or_else(|| p.column.clone(), |t| t.to_engine().label(&p.column));
        if term == engine_label {
            return Some(TermInfo { label, unit, transform: p.transform, level: None });
        }
        let level = term.strip_prefix(&format!("{}=", p.column))?;
        let reference = p.reference_level.clone().unwrap_or_else(|| "the reference level".to_owned());
        Some(TermInfo { label, unit, transform: None, level: Some((level.to_owned(), reference)) })
    }

    fn level(&self) -> f64 {
        self.fit.spec.level
    }

    fn level_words(&self) -> String {
        let pct = 100.0 * self.level();
        if (pct - pct.round()).abs() < 1e-9 {
            format!("{}%", fmt_fixed(pct, 0))
        } else {
            format!("{}%", fmt_sig(pct, 3))
        }
    }
}

fn para(s: impl Into<String>) -> Block {
    Block::Paragraph(s.into())
}

fn section(kind: SectionKind, heading: &str, blocks: Vec<Block>) -> Section {
    Section { kind, heading: heading.to_owned(), blocks }
}

fn require(field: &str, value: &str) -> Result<()> {
    if value.trim().is_empty() {
        Err(ReportError::brief(format!("the {field} is empty; the brief needs it")))
    } else {
        Ok(())
    }
}

pub(super) fn build(input: &BriefInput) -> Result<Brief> {
    require("decision question", &input.question)?;
    require("author", &input.author)?;
    require("date", &input.date)?;
    require("wardcast version", &input.wardcast_version)?;
    let fit = &input.fit;
    if fit.coefficients.is_empty() {
        return Err(ReportError::brief("the fit has no coefficients"));
    }
    let response = &fit.spec.response;
    let mut ctx = Ctx { input, fit, response_label: String::new(), response_unit: String::new() };
    ctx.response_label = ctx.label(response);
    ctx.response_unit = ctx.unit(response);
    if let Some(t) = fit.spec.response_transform {
        ctx.response_label = format!("{} ({})", ctx.response_label, transform_words(t));
        ctx.response_unit = format!(
            "{} on the transformed scale",
            if ctx.response_unit.is_empty() { "units" } else { &ctx.response_unit }
        );
    }

    let districts = district_rows(&ctx)?;
    let limitations = limitations(&ctx, &districts)?;
    let title = format!("Budgeting brief: {}", ctx.response_label);
    let mut sections = vec![
        title_section(&ctx),
        summary_section(&ctx),
        data_section(&ctx),
        model_section(&ctx),
        results_section(&ctx)?,
        checks_section(&ctx)?,
        districts_section(&ctx, &districts)?,
    ];
    sections.push(allocation_section(&ctx));
    sections.push(limitations_section(&limitations));
    sections.push(signoff_section());
    sections.push(reproducibility_section(&ctx)?);
    let brief = Brief { title, sections, limitations };
    brief.verify()?;
    Ok(brief)
}

fn transform_words(t: TransformSpec) -> String {
    match t {
        TransformSpec::Log => "natural logarithm".to_owned(),
        TransformSpec::Reciprocal => "reciprocal".to_owned(),
        TransformSpec::Sqrt => "square root".to_owned(),
        TransformSpec::Square => "square".to_owned(),
        TransformSpec::Power { lambda } => format!("power {}", fmt_sig(lambda, 3)),
    }
}

fn title_section(ctx: &Ctx<'_>) -> Section {
    let i = ctx.input;
    section(
        SectionKind::Title,
        "1. Decision question",
        vec![
            para(format!("Question: {}", i.question.trim())),
            Block::List(vec![
                format!("Prepared by: {}", i.author.trim()),
                format!("Date: {}", i.date.trim()),
                format!("Produced with wardcast {}", i.wardcast_version.trim()),
                format!("Outcome modelled: {} ({} districts)", ctx.response_label, ctx.fit.rows_used),
            ]),
        ],
    )
}

fn slopes<'a>(ctx: &Ctx<'a>) -> Vec<&'a CoefficientDoc> {
    ctx.fit.coefficients.iter().filter(|c| c.term != wardcast_engine::INTERCEPT_LABEL).collect()
}

fn excludes_zero(c: &CoefficientDoc) -> bool {
    c.interval.low > 0.0 || c.interval.high < 0.0
}

fn summary_section(ctx: &Ctx<'_>) -> Section {
    let fit = ctx.fit;
    let clear: Vec<String> = slopes(ctx)
        .iter()
        .filter(|c| excludes_zero(c))
        .map(|c| in_sentence(&ctx.term(&c.term).label))
        .collect();
    let unclear: Vec<String> = slopes(ctx)
        .iter()
        .filter(|c| !excludes_zero(c))
        .map(|c| in_sentence(&ctx.term(&c.term).label))
        .collect();
    let mut blocks = Vec::new();
    let mut first = format!(
        "Across {} districts, the indicators in the model together account for {}% of the district-to-district variation in {} (R² = {}; adjusted R² = {}).",
        fit.rows_used,
        fmt_fixed(100.0 * fit.r_squared, 0),
        in_sentence(&ctx.response_label),
        fmt_fixed(fit.r_squared, 3),
        fmt_fixed(fit.adj_r_squared, 3),
    );
    if !clear.is_empty() {
        first.push_str(&format!(
            " With the other indicators held equal, {} {} associated with the outcome: the {} interval of {} does not include zero, the value that would mean no association.",
            join_and(&clear),
            if clear.len() == 1 { "is clearly" } else { "are clearly" },
            ctx.level_words(),
            if clear.len() == 1 { "its coefficient" } else { "each of these coefficients" },
        ));
    }
    if !unclear.is_empty() {
        first.push_str(&format!(
            " For {}, the data are consistent with no association at all once the other indicators are taken into account.",
            join_and(&unclear)
        ));
    }
    blocks.push(para(first));
    let mut sentences: Vec<String> =
        slopes(ctx).iter().filter(|c| excludes_zero(c)).map(|c| coefficient_sentence(ctx, c)).collect();
    if !sentences.is_empty() {
        sentences.truncate(4);
        blocks.push(Block::List(sentences));
    }
    blocks.push(para(format!(
        "Typical size of the unexplained part: districts differ from the model's expectation by about {} {} (the residual standard deviation).",
        fmt_sig(fit.residual_sd, 3),
        if ctx.response_unit.is_empty() { "units" } else { &ctx.response_unit },
    )));
    blocks.push(para(
        "What this means: districts with these characteristics have tended to record different outcome rates. \
What it does not mean: it does not show that changing an indicator would change the outcome, it says nothing \
about any individual resident, and it does not rank districts or people. Section 9 sets out the limits in full.",
    ));
    section(SectionKind::Summary, "2. Summary in plain words", blocks)
}

/// One sentence per coefficient, written as a comparison of districts in original units.
///
/// The form is "Districts one step higher in X, with the other indicators equal, have on
/// average an outcome higher by b (95% interval for the difference: low to high)", with the
/// step chosen so the difference is readable and the outcome's unit spelled out.
fn coefficient_sentence(ctx: &Ctx<'_>, c: &CoefficientDoc) -> String {
    let info = ctx.term(&c.term);
    let level = ctx.level_words();
    let unit = &ctx.response_unit;
    let unit_words = if unit.is_empty() { String::new() } else { format!(" {unit}") };
    let tail = |scale: f64| {
        format!(
            "have on average an outcome {} by {}{unit_words} ({level} interval for the difference: {} to {}).",
            direction(c.estimate),
            fmt_coef((c.estimate * scale).abs()),
            fmt_coef(c.interval.low * scale),
            fmt_coef(c.interval.high * scale),
        )
    };
    if let Some((lvl, reference)) = &info.level {
        return format!(
            "Districts whose {} is {lvl} rather than {reference}, with the other indicators equal, {}",
            in_sentence(&info.label),
            tail(1.0)
        );
    }
    if matches!(info.transform, Some(TransformSpec::Log)) {
        // A 10% higher value adds b·ln(1.1) to the response (common practice, no published source).
        return format!(
            "Districts with 10% higher {}, with the other indicators equal, {}",
            in_sentence(&info.label),
            tail(1.1_f64.ln())
        );
    }
    if let Some(t) = info.transform {
        return format!(
            "Districts one unit higher in the {} of {}, with the other indicators equal, {}",
            transform_words(t),
            in_sentence(&info.label),
            tail(1.0)
        );
    }
    let scale = readable_step(c.estimate);
    format!(
        "Districts {} higher in {}, with the other indicators equal, {}",
        step_words(scale, &info.unit),
        in_sentence(&info.label),
        tail(scale)
    )
}

fn data_section(ctx: &Ctx<'_>) -> Section {
    let fit = ctx.fit;
    let mut used: Vec<String> = vec![fit.spec.response.clone()];
    used.extend(fit.spec.predictors.iter().map(|p| p.column.clone()));
    if let Some(w) = &fit.spec.weights {
        used.push(w.clone());
    }
    let mut blocks = vec![para(format!(
        "{} districts were used in the model; {} {} left out, each listed below with its reason.",
        fit.rows_used,
        fit.rows_dropped.len(),
        if fit.rows_dropped.len() == 1 { "was" } else { "were" },
    ))];
    let rows = ctx
        .input
        .columns
        .iter()
        .filter(|m| {
            used.contains(&m.column)
                || matches!(
                    m.role,
                    wardcast_contract::dataset::ColumnRole::Population
                        | wardcast_contract::dataset::ColumnRole::Count
                )
        })
        .map(|m| {
            vec![
                Cell::text(&m.column),
                Cell::text(m.label.clone().unwrap_or_default()),
                Cell::text(m.unit.clone().unwrap_or_default()),
                Cell::text(m.source.clone().unwrap_or_else(|| "not recorded".to_owned())),
                m.vintage.map_or(Cell::text("not recorded"), |v| Cell::number(f64::from(v), v.to_string())),
                Cell::text(if used.contains(&m.column) { "used in the model" } else { "context" }),
            ]
        })
        .collect::<Vec<_>>();
    if rows.is_empty() {
        blocks.push(para("No column metadata was recorded, so sources, agencies and vintages cannot be stated; treat the figures with extra care."));
    } else {
        blocks.push(Block::Table(Table {
            name: "sources".into(),
            caption: "Columns, sources and vintages".into(),
            columns: ["Column", "Label", "Unit", "Source (agency)", "Vintage", "Use"]
                .map(String::from)
                .to_vec(),
            rows,
        }));
    }
    match &ctx.input.join {
        Some(j) => {
            let kind = match j.kind {
                JoinKind::Inner => "an inner join (only districts present in both)",
                JoinKind::Left => "a left join (every district of the first table kept)",
            };
            let mut text = format!(
                "The analysis table joins {} and {} on {} = {} by {}: {} keys matched, giving {} rows.",
                j.left, j.right, j.left_key, j.right_key, kind, j.matched, j.rows
            );
            if !j.unmatched_left.is_empty() {
                text.push_str(&format!(
                    " Without a partner in {}: {}.",
                    j.right,
                    j.unmatched_left.join(", ")
                ));
            }
            if !j.unmatched_right.is_empty() {
                text.push_str(&format!(
                    " Without a partner in {}: {}.",
                    j.left,
                    j.unmatched_right.join(", ")
                ));
            }
            if !j.duplicates_left.is_empty() || !j.duplicates_right.is_empty() {
                let mut d = j.duplicates_left.clone();
                d.extend(j.duplicates_right.iter().cloned());
                text.push_str(&format!(" Duplicated keys: {}.", d.join(", ")));
            }
            blocks.push(para(text));
        }
        None => blocks.push(para("The analysis table came from a single source; no join was made.")),
    }
    if !fit.rows_dropped.is_empty() {
        blocks.push(Block::Table(Table {
            name: "exclusions".into(),
            caption: "Districts left out of the model".into(),
            columns: vec!["District".into(), "Reason".into()],
            rows: fit.rows_dropped.iter().map(|d| vec![Cell::text(&d.key), Cell::text(&d.reason)]).collect(),
        }));
    }
    let mut notes = ctx.input.data_notes.clone();
    notes.extend(fit.notes.iter().cloned());
    if notes.is_empty() {
        notes.push("No data-quality problems were recorded at import.".to_owned());
    }
    blocks.push(Block::Subheading("Data-quality notes".into()));
    blocks.push(Block::List(notes));
    section(SectionKind::Data, "3. Data", blocks)
}

fn model_section(ctx: &Ctx<'_>) -> Section {
    let fit = ctx.fit;
    let spec = &fit.spec;
    let mut rows = vec![vec![
        Cell::text("Response"),
        Cell::text(&spec.response),
        Cell::text(ctx.label(&spec.response)),
        Cell::text(ctx.unit(&spec.response)),
        Cell::text(spec.response_transform.map_or_else(|| "none".to_owned(), transform_words)),
    ]];
    for p in &spec.predictors {
        let t = match (&p.transform, &p.reference_level) {
            (Some(t), _) => transform_words(*t),
            (None, Some(r)) => format!("categories compared with {r}"),
            (None, None) => "none".to_owned(),
        };
        rows.push(vec![
            Cell::text("Predictor"),
            Cell::text(&p.column),
            Cell::text(ctx.label(&p.column)),
            Cell::text(ctx.unit(&p.column)),
            Cell::text(t),
        ]);
    }
    let mut blocks = vec![
        para(format!(
            "A linear regression fitted by {} with {} intercept; intervals are at the {} level.",
            if spec.weights.is_some() { "weighted least squares" } else { "ordinary least squares" },
            if spec.intercept { "an" } else { "no" },
            ctx.level_words(),
        )),
        Block::Table(Table {
            name: "variables".into(),
            caption: "Response and predictors".into(),
            columns: ["Role", "Column", "Label", "Unit", "Transform"].map(String::from).to_vec(),
            rows,
        }),
    ];
    if let Some(w) = &spec.weights {
        blocks.push(para(format!("Rows are weighted by {}.", ctx.label(w))));
    }
    blocks.push(Block::Subheading("How the model was chosen".into()));
    match &ctx.input.model_choice {
        Some(choice) => {
            blocks.push(para(format!(
                "{} The criteria compared were {}.",
                if choice.search.trim().is_empty() { "A search over candidate models was run." } else { choice.search.trim() },
                join_and(&choice.criteria),
            )));
            if !choice.candidates.is_empty() {
                let cv = choice.cv_folds.map_or_else(|| "CV RMSE".to_owned(), |k| format!("{k}-fold CV RMSE"));
                blocks.push(Block::Table(Table {
                    name: "candidates".into(),
                    caption: "Candidate models compared".into(),
                    columns: vec![
                        "Predictors".into(),
                        "Adj. R²".into(),
                        "Mallows' Cp".into(),
                        "AIC".into(),
                        "SBC".into(),
                        "PRESS".into(),
                        cv,
                        "CV RMSE spread (SD)".into(),
                        "Reported".into(),
                    ],
                    rows: choice
                        .candidates
                        .iter()
                        .map(|c| {
                            let opt = |x: Option<f64>| x.map_or(Cell::Empty, |v| Cell::number(v, fmt_sig(v, 4)));
                            vec![
                                Cell::text(c.predictors.join(", ")),
                                Cell::number(c.adj_r_squared, fmt_fixed(c.adj_r_squared, 3)),
                                opt(c.cp),
                                opt(c.aic),
                                opt(c.sbc),
                                opt(c.press),
                                opt(c.cv_rmse),
                                opt(c.cv_rmse_sd),
                                Cell::text(if c.chosen { "yes" } else { "" }),
                            ]
                        })
                        .collect(),
                }));
            }
            if !choice.nested_tests.is_empty() {
                blocks.push(Block::Table(Table {
                    name: "nested_tests".into(),
                    caption: "Partial F tests between nested models".into(),
                    columns: ["Smaller model", "Terms added", "F", "df", "p-value"].map(String::from).to_vec(),
                    rows: choice
                        .nested_tests
                        .iter()
                        .map(|t| {
                            vec![
                                Cell::text(t.smaller.join(", ")),
                                Cell::text(t.added.join(", ")),
                                t.f.map_or(Cell::text("not defined"), |f| Cell::number(f, fmt_sig(f, 4))),
                                Cell::text(format!("{}, {}", t.df_num, t.df_den)),
                                t.p_value.map_or(Cell::text("not defined"), |p| Cell::number(p, fmt_p(Some(p)))),
                            ]
                        })
                        .collect(),
                }));
            }
            if !choice.notes.is_empty() {
                blocks.push(Block::List(choice.notes.clone()));
            }
            blocks.push(para(OPTIMISTIC_P));
        }
        None => blocks.push(para(
            "The predictors were set by the analyst; no search over candidate models is recorded for this brief. \
If the predictors were chosen after looking at these data, the p-values and intervals below are optimistic.",
        )),
    }
    blocks.push(Block::Subheading("Each term given all the others".into()));
    blocks.push(Block::Table(Table {
        name: "partial_f".into(),
        caption: "Partial F test of each term given all others".into(),
        columns: ["Term", "df", "Extra sum of squares", "F", "p-value"].map(String::from).to_vec(),
        rows: fit
            .partial_f
            .iter()
            .map(|t| {
                vec![
                    Cell::text(&t.term),
                    Cell::number(t.df as f64, t.df.to_string()),
                    Cell::coef(t.sum_sq),
                    num_cell(t.f.as_f64(), |x| fmt_sig(x, 4)),
                    num_cell(t.p_value.as_f64(), |x| fmt_p(Some(x))),
                ]
            })
            .collect(),
    }));
    section(SectionKind::Model, "4. Model", blocks)
}

fn num_cell(x: Option<f64>, f: impl Fn(f64) -> String) -> Cell {
    match x {
        Some(v) if v.is_finite() => Cell::number(v, f(v)),
        Some(v) if v > 0.0 => Cell::text("infinite"),
        _ => Cell::text("not defined"),
    }
}

fn hc3(ctx: &Ctx<'_>, term: &str) -> Option<f64> {
    match &ctx.input.checks.as_ref()?.robust_errors {
        Outcome::Ok { result } => result.coefficients.iter().find(|r| r.term == term).map(|r| r.hc3),
        Outcome::Unavailable { .. } => None,
    }
}

fn results_section(ctx: &Ctx<'_>) -> Result<Section> {
    let fit = ctx.fit;
    let level = ctx.level_words();
    let rows = fit
        .coefficients
        .iter()
        .map(|c| {
            vec![
                Cell::text(&c.term),
                Cell::coef(c.estimate),
                Cell::coef(c.interval.low),
                Cell::coef(c.interval.high),
                Cell::coef(c.std_error),
                hc3(ctx, &c.term).map_or(Cell::text("not computed"), Cell::coef),
                num_cell(c.t_value.as_f64(), |x| fmt_fixed(x, 2)),
                num_cell(c.p_value.as_f64(), |x| fmt_p(Some(x))),
            ]
        })
        .collect();
    let mut blocks = vec![Block::Table(Table {
        name: "coefficients".into(),
        caption: format!("Coefficients with {level} intervals, classical and HC3 standard errors"),
        columns: vec![
            "Term".into(),
            "Estimate".into(),
            format!("{level} low"),
            format!("{level} high"),
            "SE (classical)".into(),
            "SE (HC3)".into(),
            "t".into(),
            "p-value".into(),
        ],
        rows,
    })];
    blocks.push(para(format!(
        "{INTERVAL_MEANING} The HC3 standard error does not assume equal variance across districts; where it is much larger than the classical one, the classical intervals are too narrow."
    )));
    blocks.push(Block::Subheading("What each coefficient says".into()));
    blocks.push(Block::List(slopes(ctx).iter().map(|c| coefficient_sentence(ctx, c)).collect()));
    let f = &fit.overall_f;
    let stats = vec![
        stat_row("Districts used", fit.rows_used as f64, fit.rows_used.to_string()),
        stat_row("R²", fit.r_squared, fmt_fixed(fit.r_squared, 3)),
        stat_row("Adjusted R²", fit.adj_r_squared, fmt_fixed(fit.adj_r_squared, 3)),
        stat_row("Residual standard deviation", fit.residual_sd, fmt_sig(fit.residual_sd, 4)),
        vec![Cell::text("Global F statistic"), num_cell(f.statistic.as_f64(), |x| fmt_sig(x, 4))],
        vec![Cell::text("Degrees of freedom"), Cell::text(format!("{} and {}", f.df_model, f.df_residual))],
        vec![Cell::text("Global F p-value"), num_cell(f.p_value.as_f64(), |x| fmt_p(Some(x)))],
        stat_row("AIC", fit.likelihood.aic, fmt_sig(fit.likelihood.aic, 5)),
        stat_row("SBC", fit.likelihood.sbc, fmt_sig(fit.likelihood.sbc, 5)),
    ];
    blocks.push(Block::Table(Table {
        name: "fit_statistics".into(),
        caption: "Fit statistics and the global F test".into(),
        columns: vec!["Statistic".into(), "Value".into()],
        rows: stats,
    }));
    blocks.push(para(format!(
        "The global F test asks whether the indicators together are associated with the outcome at all: F = {} on {} and {} degrees of freedom, p {}.",
        f.statistic.as_f64().map_or_else(|| "not defined".to_owned(), |x| fmt_sig(x, 4)),
        f.df_model,
        f.df_residual,
        match f.p_value.as_f64() {
            Some(p) if p < 0.001 => "< 0.001".to_owned(),
            Some(p) => format!("= {}", fmt_p(Some(p))),
            None => "not defined".to_owned(),
        },
    )));
    let effect_rows: Vec<EffectRow> = slopes(ctx)
        .iter()
        .map(|c| {
            let info = ctx.term(&c.term);
            let scale = if info.transform.is_some() || info.level.is_some() {
                1.0
            } else {
                readable_step(c.estimate)
            };
            let label = if info.level.is_some() || info.transform.is_some() {
                c.term.clone()
            } else {
                info.label.clone()
            };
            EffectRow {
                label,
                estimate: c.estimate * scale,
                low: c.interval.low * scale,
                high: c.interval.high * scale,
            }
        })
        .collect();
    if !effect_rows.is_empty() {
        let plot = EffectPlot {
            title: "Associations with the other indicators held equal".into(),
            axis: Axis::new("Difference in the outcome", ctx.response_unit.clone()),
            rows: effect_rows,
            interval_name: format!("{level} confidence interval"),
            reference: Some(0.0),
            reference_label: "No association".into(),
            decimals: None,
            summary: "Each row shows the estimated difference between districts one step apart in one indicator, the others equal.".into(),
        };
        blocks.push(Block::Figure(Figure {
            caption: "Estimated associations with their intervals, each for the step stated in the sentences above (for example 1,000 of a currency unit rather than 1). An interval crossing the zero line is consistent with no association.".into(),
            svg: plot.render()?,
        }));
    }
    Ok(section(SectionKind::Results, "5. Results", blocks))
}

fn stat_row(name: &str, value: f64, shown: String) -> Vec<Cell> {
    vec![Cell::text(name), Cell::number(value, shown)]
}

fn check_name(id: &str) -> String {
    let (base, rest) = id.split_once(':').map_or((id, None), |(a, b)| (a, Some(b)));
    let name = match base {
        "shapiro_wilk" => "Normality of residuals (Shapiro-Wilk)",
        "brown_forsythe" => "Constant variance (Brown-Forsythe)",
        "breusch_pagan_predictors" => "Constant variance against the predictors (Breusch-Pagan)",
        "breusch_pagan_fitted" => "Constant variance against the fitted values (Breusch-Pagan)",
        "reset" => "Straight-line form (RESET)",
        "influence" => "Influential districts",
        "vif" => "Overlap between predictors (VIF)",
        "condition" => "Overlap between predictors (condition indices)",
        "robust" | "robust_errors" => "Robust standard errors (HC3)",
        "rows_guard" => "Districts per predictor",
        "response_power" => "Transform of the response",
        "box_tidwell" => "Transform of a predictor (Box-Tidwell)",
        other => other,
    };
    match rest {
        Some(r) => format!("{name}: {r}"),
        None => name.to_owned(),
    }
}

fn checks_section(ctx: &Ctx<'_>) -> Result<Section> {
    let Some(checks) = &ctx.input.checks else {
        return Ok(section(
            SectionKind::Checks,
            "6. Checks",
            vec![para(
                "The model checks were not run for this brief. Without them, nothing here shows whether the model's \
assumptions hold, and the intervals and p-values should be given little weight.",
            )],
        ));
    };
    let mut blocks = vec![para(format!(
        "Each check below gives its verdict (clear, watch or problem), the test behind it and its numbers. Tests use a significance threshold of {}.",
        fmt_sig(checks.alpha, 2)
    ))];
    blocks.push(Block::Table(Table {
        name: "checks".into(),
        caption: "Check verdicts".into(),
        columns: ["Check", "Verdict", "Test", "Statistic", "p-value", "Threshold", "What it means"]
            .map(String::from)
            .to_vec(),
        rows: checks
            .summary
            .iter()
            .map(|v| {
                vec![
                    Cell::text(check_name(&v.check)),
                    Cell::text(&v.verdict.level),
                    Cell::text(&v.verdict.test),
                    num_cell(v.verdict.statistic.as_f64(), |x| fmt_sig(x, 4)),
                    match v.verdict.p_value.as_f64() {
                        Some(p) => Cell::number(p, fmt_p(Some(p))),
                        None => Cell::Empty,
                    },
                    Cell::text(&v.verdict.threshold),
                    Cell::text(&v.verdict.meaning),
                ]
            })
            .collect(),
    }));
    let flagged = flagged_keys(checks);
    if let Outcome::Ok { result } = &checks.linearity.residuals_vs_fitted {
        let plot = Scatter {
            title: "Residuals against fitted values".into(),
            x_axis: Axis::new("Fitted value", ctx.response_unit.clone()),
            y_axis: Axis::new("Residual", ctx.response_unit.clone()),
            items: "districts".into(),
            points: result.points.iter().map(|p| ScatterPoint::keyed(p.x, p.y, &p.key, &flagged)).collect(),
            references: vec![Reference::Horizontal { y: 0.0, label: "Residual of zero".into() }],
            labels: PointLabels::Flagged,
            flagged_meaning: "Influential district".into(),
            summary: "A pattern or a funnel shape would suggest a curved relation or unequal variance."
                .into(),
        };
        blocks.push(Block::Figure(Figure {
            caption:
                "Residuals against fitted values. Points should scatter evenly around zero with no pattern."
                    .into(),
            svg: plot.render()?,
        }));
    }
    if let Outcome::Ok { result } = &checks.normality.qq_plot {
        let plot = QqPlot {
            title: "Normal quantile plot of residuals".into(),
            x_axis: Axis::new("Standard normal quantile", ""),
            y_axis: Axis::new("Standardized residual", ""),
            items: "districts".into(),
            points: result.points.iter().map(|p| QqPoint::keyed(p.x, p.y, &p.key, &flagged)).collect(),
            line: QqLine::Quartiles,
            labels: PointLabels::Flagged,
            flagged_meaning: "Influential district".into(),
            summary: "Points close to the line are consistent with normally distributed residuals.".into(),
        };
        blocks.push(Block::Figure(Figure {
            caption: "Normal quantile plot. Points far from the line in the tails weaken the intervals."
                .into(),
            svg: plot.render()?,
        }));
    }
    blocks.push(Block::Subheading("Influential districts".into()));
    match &checks.influence {
        Outcome::Ok { result } if !result.flagged.is_empty() => {
            blocks.push(para(format!(
                "{} {} stand out on at least one influence measure (leverage above {}, |DFFITS| above {}, |DFBETAS| above {}, a large Cook's distance, or a Bonferroni outlier test). Standing out does not make a district wrong; it means the results lean on it.",
                result.flagged.len(),
                if result.flagged.len() == 1 { "district" } else { "districts" },
                fmt_sig(result.thresholds.hat, 3),
                fmt_sig(result.thresholds.dffits, 3),
                fmt_sig(result.thresholds.dfbetas, 3),
            )));
            blocks.push(Block::Table(Table {
                name: "influence".into(),
                caption: "Districts that stand out on an influence measure".into(),
                columns: [
                    "District",
                    "Leverage",
                    "Cook's distance",
                    "Cook's band",
                    "DFFITS",
                    "Studentized deleted residual",
                    "Bonferroni p",
                ]
                .map(String::from)
                .to_vec(),
                rows: result
                    .rows
                    .iter()
                    .filter(|r| r.flagged)
                    .map(|r| {
                        vec![
                            Cell::text(&r.key),
                            Cell::number(r.hat, fmt_fixed(r.hat, 3)),
                            num_cell(r.cooks_d.as_f64(), |x| fmt_sig(x, 3)),
                            Cell::text(r.cooks_band.clone().unwrap_or_default()),
                            num_cell(r.dffits.as_f64(), |x| fmt_sig(x, 3)),
                            num_cell(r.studentized_deleted.as_f64(), |x| fmt_sig(x, 3)),
                            num_cell(r.outlier_p_bonferroni.as_f64(), |x| fmt_p(Some(x))),
                        ]
                    })
                    .collect(),
            }));
        }
        Outcome::Ok { .. } => blocks.push(para("No district stands out on the influence measures.")),
        Outcome::Unavailable { reason } => {
            blocks.push(para(format!("The influence measures could not be computed: {reason}.")))
        }
    }
    if let Outcome::Ok { result } = &checks.refit_without_flagged {
        blocks.push(para(format!(
            "Side by side: the model as fitted ({} districts, R² = {}) and without {} ({} districts, R² = {}). Coefficients that move a lot or change sign rest on those districts.",
            result.original.rows_used,
            fmt_fixed(result.original.r_squared, 3),
            join_and(&result.removed),
            result.refit.rows_used,
            fmt_fixed(result.refit.r_squared, 3),
        )));
        blocks.push(Block::Table(Table {
            name: "with_without".into(),
            caption: "Coefficients with and without the influential districts".into(),
            columns: ["Term", "Estimate (all)", "SE (all)", "Estimate (without)", "SE (without)", "Change"]
                .map(String::from)
                .to_vec(),
            rows: result
                .coefficients
                .iter()
                .map(|c| {
                    vec![
                        Cell::text(&c.term),
                        Cell::coef(c.original_estimate),
                        Cell::coef(c.original_std_error),
                        Cell::coef(c.refit_estimate),
                        Cell::coef(c.refit_std_error),
                        Cell::coef(c.refit_estimate - c.original_estimate),
                    ]
                })
                .collect(),
        }));
    }
    Ok(section(SectionKind::Checks, "6. Checks", blocks))
}

fn flagged_keys(checks: &ChecksDocument) -> Vec<String> {
    match &checks.influence {
        Outcome::Ok { result } => result.flagged.clone(),
        Outcome::Unavailable { .. } => Vec::new(),
    }
}

/// One district's observed and expected values with the prediction interval.
struct DistrictRow {
    key: String,
    observed: f64,
    expected: f64,
    low: f64,
    high: f64,
}

impl DistrictRow {
    fn position(&self) -> &'static str {
        if self.observed > self.high {
            "higher than the indicators predict"
        } else if self.observed < self.low {
            "lower than the indicators predict"
        } else {
            "within the expected range"
        }
    }
}

fn district_rows(ctx: &Ctx<'_>) -> Result<Vec<DistrictRow>> {
    let fit = ctx.fit;
    let given: &[PredictionDoc] = &ctx.input.district_predictions;
    if !given.is_empty() {
        return Ok(fit
            .rows
            .iter()
            .filter_map(|r| {
                let p = given.iter().find(|p| p.label == r.key)?;
                Some(DistrictRow {
                    key: r.key.clone(),
                    observed: r.observed,
                    expected: p.fit,
                    low: p.new_area_interval.low,
                    high: p.new_area_interval.high,
                })
            })
            .collect());
    }
    if fit.spec.weights.is_some() || fit.df_residual == 0 {
        return Ok(Vec::new());
    }
    // Prediction interval for a new district with the same indicator values:
    // fitted ± t(1 − α/2; n − p) · sqrt(MSE · (1 + h_i)) (Kutner et al. 2005, eq. 6.63, from memory).
    let t = t_quantile(1.0 - (1.0 - fit.spec.level) / 2.0, fit.df_residual as f64);
    if !t.is_finite() {
        return Err(ReportError::brief("the prediction intervals cannot be computed for this fit"));
    }
    Ok(fit
        .rows
        .iter()
        .map(|r| {
            let half = t * (fit.mse * (1.0 + r.leverage)).sqrt();
            DistrictRow {
                key: r.key.clone(),
                observed: r.observed,
                expected: r.fitted,
                low: r.fitted - half,
                high: r.fitted + half,
            }
        })
        .collect())
}

fn districts_section(ctx: &Ctx<'_>, rows: &[DistrictRow]) -> Result<Section> {
    let level = ctx.level_words();
    if rows.is_empty() {
        return Ok(section(
            SectionKind::Districts,
            "7. Districts",
            vec![para(
                "Prediction intervals per district were not supplied for this weighted model, so observed and expected values are not compared here.",
            )],
        ));
    }
    let higher: Vec<String> = rows.iter().filter(|r| r.observed > r.high).map(|r| r.key.clone()).collect();
    let lower: Vec<String> = rows.iter().filter(|r| r.observed < r.low).map(|r| r.key.clone()).collect();
    let mut blocks = vec![para(format!(
        "For each district, the expected value is what the model gives for a district with its indicator values; the {level} prediction interval is the range a district with those values would fall in. \
A district outside its interval is not a problem or a failure: it differs from what these indicators alone would suggest, for reasons the model does not see."
    ))];
    let mut outside = Vec::new();
    if !higher.is_empty() {
        outside.push(format!("Higher than the indicators predict: {}.", higher.join(", ")));
    }
    if !lower.is_empty() {
        outside.push(format!("Lower than the indicators predict: {}.", lower.join(", ")));
    }
    if outside.is_empty() {
        outside.push("Every district lies within its prediction interval.".to_owned());
    }
    let expected_outside = (1.0 - ctx.level()) * rows.len() as f64;
    outside.push(format!(
        "With {} districts, about {} would fall outside a {level} interval by chance alone.",
        rows.len(),
        fmt_fixed(expected_outside, 1)
    ));
    blocks.push(Block::List(outside));
    let (min, max) = rows.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), r| {
        (a.min(r.observed).min(r.expected), b.max(r.observed).max(r.expected))
    });
    let plot = Scatter {
        title: "Observed against expected".into(),
        x_axis: Axis::new("Expected", ctx.response_unit.clone()),
        y_axis: Axis::new("Observed", ctx.response_unit.clone()),
        items: "districts".into(),
        points: rows
            .iter()
            .map(|r| {
                let p = ScatterPoint::new(r.expected, r.observed).labelled(&r.key);
                if r.observed > r.high || r.observed < r.low { p.flagged() } else { p }
            })
            .collect(),
        references: if min.is_finite() && max.is_finite() {
            vec![Reference::Line { intercept: 0.0, slope: 1.0, label: "Observed equals expected".into() }]
        } else {
            Vec::new()
        },
        labels: PointLabels::Flagged,
        flagged_meaning: "Outside its prediction interval".into(),
        summary: "Points above the line recorded more than the indicators predict; points below, fewer."
            .into(),
    };
    blocks.push(Block::Figure(Figure {
        caption: format!("Observed against expected per district; marked districts lie outside their {level} prediction interval."),
        svg: plot.render()?,
    }));
    blocks.push(Block::Table(Table {
        name: "districts".into(),
        caption: format!("Observed and expected per district with {level} prediction intervals"),
        columns: ["District", "Observed", "Expected", "Interval low", "Interval high", "Position"]
            .map(String::from)
            .to_vec(),
        rows: rows
            .iter()
            .map(|r| {
                vec![
                    Cell::text(&r.key),
                    Cell::number(r.observed, fmt_sig(r.observed, 4)),
                    Cell::number(r.expected, fmt_sig(r.expected, 4)),
                    Cell::number(r.low, fmt_sig(r.low, 4)),
                    Cell::number(r.high, fmt_sig(r.high, 4)),
                    Cell::text(r.position()),
                ]
            })
            .collect(),
    }));
    if ctx.fit.spec.response_transform.is_none()
        && any_negative(rows.iter().flat_map(|r| [r.expected, r.low, r.high]))
    {
        blocks.push(para(NEGATIVE_PREDICTION));
    }
    Ok(section(SectionKind::Districts, "7. Districts", blocks))
}

/// The kept what-if scenarios: a framing paragraph, one table row per scenario with both
/// intervals, and the note on negative predictions when one applies.
fn scenario_blocks(ctx: &Ctx<'_>) -> Vec<Block> {
    let scenarios = &ctx.input.scenarios;
    if scenarios.is_empty() {
        return Vec::new();
    }
    let level = ctx.level_words();
    let mut blocks = vec![
        Block::Subheading("What-if scenarios".into()),
        para(format!(
            "Districts that differ from the data in the way each row describes are predicted to have the values below, with the {level} interval for the mean of such districts and, for a single such district, the wider {level} prediction interval. \
These compare districts with different indicator values; they are not estimates of what changing an indicator would do, because the model compares districts at one time and follows none through a change."
        )),
    ];
    let interval = |x: Option<f64>| x.map_or(Cell::Empty, |v| Cell::number(v, fmt_sig(v, 4)));
    let rows = scenarios
        .iter()
        .map(|s| {
            vec![
                Cell::text(&s.description),
                Cell::text(&s.predicts),
                Cell::number(s.predicted, fmt_sig(s.predicted, 4)),
                Cell::number(s.mean_low, fmt_sig(s.mean_low, 4)),
                Cell::number(s.mean_high, fmt_sig(s.mean_high, 4)),
                interval(s.new_low),
                interval(s.new_high),
                Cell::text(if s.beyond_data {
                    format!("yes: {}", s.extrapolation)
                } else if s.extrapolation.is_empty() {
                    "no".to_owned()
                } else {
                    format!("no; {}", s.extrapolation)
                }),
            ]
        })
        .collect();
    blocks.push(Block::Table(Table {
        name: "scenarios".into(),
        caption: format!("Kept what-if scenarios with {level} intervals"),
        columns: [
            "Scenario",
            "Predicted for",
            "Predicted",
            "Mean interval low",
            "Mean interval high",
            "Single-district interval low",
            "Single-district interval high",
            "Beyond the data",
        ]
        .map(String::from)
        .to_vec(),
        rows,
    }));
    if scenarios.iter().any(|s| s.beyond_data) {
        blocks.push(para(
            "A scenario beyond the data combines values unlike any district the model was fitted on; its intervals understate how little the data say about such a district.",
        ));
    }
    if ctx.fit.spec.response_transform.is_none() && any_negative(scenarios.iter().flat_map(|s| s.values())) {
        blocks.push(para(NEGATIVE_PREDICTION));
    }
    blocks
}

fn allocation_section(ctx: &Ctx<'_>) -> Section {
    let mut blocks = scenario_blocks(ctx);
    let Some(a) = ctx.input.allocation.as_ref() else {
        blocks.push(para(if blocks.is_empty() {
            "No scenario or allocation was run for this analysis, so the brief proposes no amounts."
        } else {
            "No allocation was run for this analysis, so the brief proposes no amounts."
        }));
        return section(SectionKind::Allocation, ALLOCATION_HEADING, blocks);
    };
    if !blocks.is_empty() {
        blocks.push(Block::Subheading("Allocation".into()));
    }
    let sum: f64 = a.rows.iter().map(|r| r.amount).sum();
    let rounding = if (sum - a.total).abs() < 0.5 {
        "Amounts are rounded so that they sum exactly to the total.".to_owned()
    } else {
        format!(
            "The amounts sum to {} {}, not to the total; the difference is {}.",
            fmt_amount(sum),
            a.currency,
            fmt_amount(sum - a.total)
        )
    };
    blocks.push(para(format!(
        "A transparent formula allocation of {} {} across districts for prevention and service funding, on the basis of {}. {rounding} The allocation divides funding between areas; it does not rank people.",
        fmt_amount(a.total),
        a.currency,
        a.chosen_basis,
    )));
    let mut rules = Vec::new();
    if let Some(f) = a.floor {
        rules.push(format!("Floor per district: {} {}.", fmt_amount(f), a.currency));
    }
    if let Some(c) = a.cap {
        rules.push(format!("Cap per district: {} {}.", fmt_amount(c), a.currency));
    }
    if let (Some(seed), Some(draws)) = (a.seed, a.draws) {
        rules.push(format!(
            "Share ranges come from {draws} simulated draws of the coefficients (seed {seed}), not from rescaling interval bounds."
        ));
    }
    rules.extend(a.notes.iter().cloned());
    if !rules.is_empty() {
        blocks.push(Block::List(rules));
    }
    let mut columns = vec!["District".to_owned(), "This year's budget".to_owned()];
    columns.extend(a.bases.iter().map(|b| format!("Share: {b}")));
    columns.extend(["Proposed amount", "Share range low", "Share range high"].map(String::from));
    let rows =
        a.rows
            .iter()
            .map(|r| {
                let mut row = vec![
                    Cell::text(&r.key),
                    r.current_budget.map_or(Cell::Empty, |b| Cell::number(b, fmt_amount(b))),
                ];
                row.extend(
                    a.bases.iter().enumerate().map(|(j, _)| {
                        r.shares.get(j).map_or(Cell::Empty, |s| Cell::number(*s, fmt_share(*s)))
                    }),
                );
                row.push(Cell::number(r.amount, fmt_amount(r.amount)));
                row.push(r.share_low.map_or(Cell::Empty, |s| Cell::number(s, fmt_share(s))));
                row.push(r.share_high.map_or(Cell::Empty, |s| Cell::number(s, fmt_share(s))));
                row
            })
            .collect();
    blocks.push(Block::Table(Table {
        name: "allocation".into(),
        caption: "Shares under each basis and the proposed allocation".into(),
        columns,
        rows,
    }));
    blocks.push(para(
        "The spread of shares across bases shows how much the choice of basis, rather than the model, moves money. The choice of basis is a policy decision.",
    ));
    section(SectionKind::Allocation, ALLOCATION_HEADING, blocks)
}

const ALLOCATION_HEADING: &str = "8. Scenarios and allocation";

fn failed_checks(ctx: &Ctx<'_>) -> Vec<String> {
    ctx.input.checks.as_ref().map_or_else(Vec::new, |c| {
        c.summary
            .iter()
            .filter(|v| v.verdict.level == "problem")
            .map(|v| in_sentence(&check_name(&v.check)))
            .collect()
    })
}

fn limitations(ctx: &Ctx<'_>, districts: &[DistrictRow]) -> Result<Limitations> {
    let resp = in_sentence(&ctx.response_label);
    let indicators: Vec<String> =
        ctx.fit.spec.predictors.iter().map(|p| in_sentence(&ctx.label(&p.column))).collect();
    let n = ctx.fit.rows_used;
    let population = ctx
        .input
        .columns
        .iter()
        .find(|c| c.role == wardcast_contract::dataset::ColumnRole::Population)
        .map_or_else(|| "residents".to_owned(), |c| in_sentence(c.label.as_deref().unwrap_or(&c.column)));
    let failed = failed_checks(ctx);
    let weight = if ctx.input.checks.is_none() {
        "The model checks were not run, so there is no evidence that the model's assumptions hold; the intervals and p-values should bear little weight.".to_owned()
    } else if failed.is_empty() {
        format!(
            "No check gave a problem verdict. Passing checks does not prove the model right: with {n} districts, modest departures go undetected, so treat the intervals as approximate."
        )
    } else {
        format!(
            "The model failed these checks: {}. Where a check fails, the intervals and p-values are less trustworthy than they look, and the coefficients can bear only limited weight: use them to frame questions, not to set amounts on their own.",
            join_and(&failed)
        )
    };
    let outside = districts.iter().filter(|r| r.observed > r.high || r.observed < r.low).count();
    let items = vec![
        CautionText {
            heading: Limitations::REQUIRED[0].into(),
            text: format!(
                "This analysis shows how {resp} and {} move together across {n} districts. It does not show that changing any of them would change {resp}; other conditions that differ between districts may drive both.",
                join_and(&indicators)
            ),
        },
        CautionText {
            heading: Limitations::REQUIRED[1].into(),
            text: "The results describe districts, not residents. A pattern across areas need not hold for the people living in them (Robinson 1950): nothing here says anything about any individual.".into(),
        },
        CautionText {
            heading: Limitations::REQUIRED[2].into(),
            text: "Associations between area rates depend on where boundaries are drawn and how large the areas are; the same data grouped into other areas can give different and even opposite results (Openshaw 1984).".into(),
        },
        CautionText {
            heading: Limitations::REQUIRED[3].into(),
            text: format!(
                "Rates for districts with few {population} swing widely on a handful of incidents. {} Treat small districts' values, residuals and positions with extra care.",
                if outside > 0 { format!("Some of the {outside} districts outside their interval may be there by chance for this reason.") } else { String::new() }
            ),
        },
        CautionText {
            heading: Limitations::REQUIRED[4].into(),
            text: if ctx.input.counts_from_enforcement {
                "The outcome counts are recorded by enforcement and service activity, so they partly measure where attention already goes. Directing more attention by these counts can raise the same counts and confirm itself (Lum & Isaac 2016; Ensign et al. 2018). Use independent measures where they exist.".into()
            } else {
                "If any count here depends on where agencies look, directing more attention by it can raise the same counts and confirm itself (Lum & Isaac 2016; Ensign et al. 2018).".into()
            },
        },
        CautionText {
            heading: Limitations::REQUIRED[5].into(),
            text: "The model describes districts within the range of indicator values seen here. Predictions for values outside that range, for other cities, or for other years are guesses the data do not support.".into(),
        },
        CautionText { heading: Limitations::REQUIRED[6].into(), text: weight },
        CautionText {
            heading: Limitations::REQUIRED[7].into(),
            text: "This brief is evidence for a discussion, not a decision. Any allocation decision rests with local policy, legal and equity review and with licensed professionals who know the districts.".into(),
        },
    ];
    Limitations::new(items)
}

fn limitations_section(l: &Limitations) -> Section {
    let mut blocks = Vec::new();
    for item in l.items() {
        blocks.push(Block::Subheading(item.heading.clone()));
        blocks.push(para(item.text.clone()));
    }
    section(SectionKind::Limitations, LIMITATIONS_HEADING, blocks)
}

/// The fields of the reviewer sign-off block.
pub const SIGN_OFF_FIELDS: [&str; 3] =
    ["Reviewer name", "Date", "Reviewed for data quality, method and equity"];

fn signoff_section() -> Section {
    section(
        SectionKind::SignOff,
        "10. Reviewer sign-off",
        vec![
            para("To be completed by the reviewer before the brief is attached to a memo."),
            Block::SignOff(SIGN_OFF_FIELDS.iter().map(|s| (*s).to_owned()).collect()),
        ],
    )
}

fn reproducibility_section(ctx: &Ctx<'_>) -> Result<Section> {
    let mut blocks = Vec::new();
    blocks.push(Block::Table(Table {
        name: "checksums".into(),
        caption: "Dataset versions read".into(),
        columns: vec!["Dataset version".into(), "Checksum".into()],
        rows: if ctx.input.checksums.is_empty() {
            vec![vec![Cell::text("not recorded"), Cell::text("not recorded")]]
        } else {
            ctx.input
                .checksums
                .iter()
                .map(|c| vec![Cell::text(&c.version_id), Cell::text(&c.checksum)])
                .collect()
        },
    }));
    let mut seeds = Vec::new();
    if let Some(choice) = &ctx.input.model_choice
        && !choice.cv_seeds.is_empty()
    {
        let s: Vec<String> = choice.cv_seeds.iter().map(u64::to_string).collect();
        seeds.push(format!(
            "Model-choice cross-validation: {} folds, seeds {}.",
            choice.cv_folds.map_or_else(|| "k".to_owned(), |k| k.to_string()),
            s.join(", ")
        ));
    }
    if let Some(checks) = &ctx.input.checks
        && let Outcome::Ok { result } = &checks.transformations.search
    {
        seeds.push(format!("Transformation search: {} folds, seed {}.", result.folds, result.seed));
    }
    if let Some(a) = &ctx.input.allocation
        && let Some(seed) = a.seed
    {
        seeds.push(format!("Allocation share simulation: seed {seed}."));
    }
    if seeds.is_empty() {
        seeds.push("No randomised step was run for this brief.".to_owned());
    }
    blocks.push(Block::Subheading("Random seeds".into()));
    blocks.push(Block::List(seeds));
    blocks.push(Block::Subheading("Model spec (wardcast JSON schema)".into()));
    let spec = serde_json::to_string_pretty(&ctx.fit.spec)
        .map_err(|e| ReportError::brief(format!("the model spec cannot be written: {e}")))?;
    blocks.push(Block::Code(spec));
    blocks.push(para(format!(
        "Produced with wardcast {}, schema {}. Formulas and their sources are listed in docs/METHODS.md; the works cited in this brief are:",
        ctx.input.wardcast_version, ctx.fit.schema_version
    )));
    blocks.push(Block::List(REFERENCES.iter().map(|s| (*s).to_owned()).collect()));
    Ok(section(SectionKind::Reproducibility, "11. Reproducibility appendix", blocks))
}

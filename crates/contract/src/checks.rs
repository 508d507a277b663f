//! The checks document: diagnostics results (assumption checks, influence, collinearity, transforms).
//!
//! Built from an engine [`Checks`] report by [`ChecksDocument::from_checks`]. Every number of
//! every check is here, each check with its verdict. A check the engine could not compute for
//! this model is `{"status": "unavailable", "reason": "…"}` in place of its result, so one bad
//! check never hides the others. Values that may be infinite or undefined use [`Number`]
//! (`"Infinity"`, `"-Infinity"`, `null`). Formulas and sources are in `docs/METHODS.md`.

use serde::{Deserialize, Serialize};
use wardcast_engine::diagnostics::{
    AddedVariable, BoxTidwell, BreuschPagan, BrownForsythe, CheckOutcome, Checks, ComponentResidual,
    ConditionDiagnostics, Correlation, Influence, Named, PlotPoint, PowerProfile, QqPlot, Refit, RefitSide,
    Reset, ResidualTable, RobustErrors, RowsGuard, ShapiroWilk, TransformSearch, Verdict, Vif,
};

use crate::SCHEMA_VERSION;
use crate::cautions::{Caution, standing_cautions};
use crate::numbers::Number;
use crate::spec::ModelSpec;

/// The result of one check, or why it is not available.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "status", rename_all = "snake_case")]
pub enum Outcome<T> {
    /// The check was computed.
    Ok {
        /// Its result.
        result: T,
    },
    /// The check could not be computed for this model.
    Unavailable {
        /// Why, in plain words.
        reason: String,
    },
}

impl<T> Outcome<T> {
    fn map<S>(o: &CheckOutcome<S>, f: impl FnOnce(&S) -> T) -> Outcome<T> {
        match o {
            CheckOutcome::Ok(v) => Outcome::Ok { result: f(v) },
            CheckOutcome::Unavailable(r) => Outcome::Unavailable { reason: r.clone() },
        }
    }
}

/// A check about one design column or predictor.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NamedOutcome<T> {
    /// The column label.
    pub name: String,
    /// The check.
    pub check: Outcome<T>,
}

fn named<S, T>(items: &[Named<S>], f: impl Fn(&S) -> T) -> Vec<NamedOutcome<T>> {
    items
        .iter()
        .map(|n| NamedOutcome { name: n.name().to_owned(), check: Outcome::map(n.outcome(), &f) })
        .collect()
}

/// A verdict in plain language.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct VerdictDoc {
    /// `clear`, `watch` or `problem`.
    pub level: String,
    /// The test or measure behind it.
    pub test: String,
    /// The statistic it rests on.
    pub statistic: Number,
    /// The p-value, when the verdict comes from a test.
    pub p_value: Number,
    /// The threshold used, in words.
    pub threshold: String,
    /// One sentence on what it means for the brief.
    pub meaning: String,
}

impl From<&Verdict> for VerdictDoc {
    fn from(v: &Verdict) -> Self {
        VerdictDoc {
            level: v.label().as_str().to_owned(),
            test: v.test().to_owned(),
            statistic: Number::from_f64(v.statistic()),
            p_value: Number::from_opt(v.p_value()),
            threshold: v.threshold().to_owned(),
            meaning: v.meaning().to_owned(),
        }
    }
}

/// A verdict with the name of its check, for the summary list.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NamedVerdict {
    /// The check, e.g. `shapiro_wilk` or `box_tidwell:vacancy_pct`.
    pub check: String,
    /// Its verdict.
    pub verdict: VerdictDoc,
}

/// One row's residuals.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResidualRowDoc {
    /// Region key.
    pub key: String,
    /// Fitted value.
    pub fitted: f64,
    /// Raw residual `y − ŷ`.
    pub raw: f64,
    /// Residual used by the checks: `√w·e` under WLS, the raw residual otherwise.
    pub scaled: f64,
    /// Hat value (leverage).
    pub hat: f64,
    /// Internally studentized (standardized) residual; null where the leverage is 1.
    pub standardized: Number,
    /// Studentized deleted residual; null where undefined.
    pub studentized_deleted: Number,
}

/// Residuals of every row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResidualsDoc {
    /// One entry per row, in row order.
    pub rows: Vec<ResidualRowDoc>,
}

fn residuals_doc(r: &ResidualTable) -> ResidualsDoc {
    let rows = (0..r.keys().len())
        .map(|i| ResidualRowDoc {
            key: r.keys()[i].clone(),
            fitted: r.fitted()[i],
            raw: r.raw()[i],
            scaled: r.scaled()[i],
            hat: r.hat()[i],
            standardized: Number::from_opt(r.internal()[i]),
            studentized_deleted: Number::from_opt(r.external()[i]),
        })
        .collect();
    ResidualsDoc { rows }
}

/// The Shapiro-Wilk test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ShapiroDoc {
    /// Sample size.
    pub n: usize,
    /// The W statistic.
    pub w: f64,
    /// The p-value by Royston's (1995) algorithm.
    pub p_value: f64,
    /// The verdict.
    pub verdict: VerdictDoc,
}

/// A point of a plot, named by region key.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PointDoc {
    /// Region key.
    pub key: String,
    /// Horizontal coordinate.
    pub x: f64,
    /// Vertical coordinate.
    pub y: f64,
}

fn points(p: &[PlotPoint]) -> Vec<PointDoc> {
    p.iter().map(|q| PointDoc { key: q.key().to_owned(), x: q.x(), y: q.y() }).collect()
}

/// Normal quantile plot data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct QqDoc {
    /// The plotting positions, in words.
    pub positions: String,
    /// Points: x = normal quantile, y = standardized residual, in increasing order.
    pub points: Vec<PointDoc>,
    /// Rows left out because their standardized residual is undefined.
    pub omitted: Vec<String>,
}

fn qq_doc(q: &QqPlot) -> QqDoc {
    QqDoc {
        positions: q.positions().to_owned(),
        points: q
            .points()
            .iter()
            .map(|p| PointDoc { key: p.key().to_owned(), x: p.theoretical(), y: p.residual() })
            .collect(),
        omitted: q.omitted().to_vec(),
    }
}

/// Normality checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NormalityDoc {
    /// The Shapiro-Wilk test of the residuals.
    pub shapiro_wilk: Outcome<ShapiroDoc>,
    /// Normal quantile plot data.
    pub qq_plot: Outcome<QqDoc>,
}

/// The Brown-Forsythe test in its regression form.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BrownForsytheDoc {
    /// How rows are split into the two groups.
    pub split_rule: String,
    /// The median fitted value.
    pub median_fitted: f64,
    /// Rows in the lower group.
    pub lower_n: usize,
    /// Rows in the upper group.
    pub upper_n: usize,
    /// Pooled two-sample t statistic on the absolute deviations.
    pub t: f64,
    /// t², equal to Levene's statistic centred at the median.
    pub t_squared: f64,
    /// Degrees of freedom n − 2.
    pub df: usize,
    /// Two-sided p-value.
    pub p_value: f64,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn brown_forsythe_doc(b: &BrownForsythe) -> BrownForsytheDoc {
    BrownForsytheDoc {
        split_rule: "rows with fitted value at or below the median fitted value form the lower group"
            .to_owned(),
        median_fitted: b.median_fitted(),
        lower_n: b.lower_n(),
        upper_n: b.upper_n(),
        t: b.t(),
        t_squared: b.t_squared(),
        df: b.df(),
        p_value: b.p_value(),
        verdict: b.verdict().into(),
    }
}

/// Koenker's studentized Breusch-Pagan test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BreuschPaganDoc {
    /// What the squared residuals were regressed on.
    pub against: String,
    /// LM = n·R².
    pub lm: f64,
    /// χ² degrees of freedom.
    pub lm_df: usize,
    /// p-value of LM.
    pub lm_p_value: f64,
    /// F statistic of the auxiliary regression.
    pub f: Number,
    /// Its numerator and denominator degrees of freedom.
    pub f_df: [usize; 2],
    /// Its p-value.
    pub f_p_value: f64,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn breusch_pagan_doc(b: &BreuschPagan) -> BreuschPaganDoc {
    BreuschPaganDoc {
        against: b.against().to_owned(),
        lm: b.lm(),
        lm_df: b.lm_df(),
        lm_p_value: b.lm_p_value(),
        f: Number::from_f64(b.f()),
        f_df: [b.f_df().0, b.f_df().1],
        f_p_value: b.f_p_value(),
        verdict: b.verdict().into(),
    }
}

/// Constant-variance checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct VarianceDoc {
    /// Brown-Forsythe split at the median fitted value.
    pub brown_forsythe: Outcome<BrownForsytheDoc>,
    /// Breusch-Pagan against the predictors.
    pub breusch_pagan_predictors: Outcome<BreuschPaganDoc>,
    /// Breusch-Pagan against the fitted values.
    pub breusch_pagan_fitted: Outcome<BreuschPaganDoc>,
}

/// A plot series.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SeriesDoc {
    /// Points.
    pub points: Vec<PointDoc>,
}

/// A plot series about one column.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NamedSeriesDoc {
    /// The design column label.
    pub name: String,
    /// Points.
    pub points: Vec<PointDoc>,
}

/// Added-variable plot data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AddedVariableDoc {
    /// Slope through the origin of the points.
    pub slope: f64,
    /// The coefficient in the model (equal to the slope).
    pub coefficient: f64,
    /// Points: x = column residual, y = response residual, both on the other columns.
    pub points: Vec<PointDoc>,
}

fn added_variable_doc(a: &AddedVariable) -> AddedVariableDoc {
    AddedVariableDoc { slope: a.slope(), coefficient: a.coefficient(), points: points(a.points()) }
}

/// Component-plus-residual plot data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ComponentResidualDoc {
    /// The column's coefficient.
    pub coefficient: f64,
    /// Points: x = column value, y = coefficient × value + raw residual.
    pub points: Vec<PointDoc>,
}

fn component_doc(c: &ComponentResidual) -> ComponentResidualDoc {
    ComponentResidualDoc { coefficient: c.coefficient(), points: points(c.points()) }
}

/// Ramsey's RESET test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResetDoc {
    /// Powers of the fitted values added.
    pub powers: Vec<u32>,
    /// F statistic.
    pub f: Number,
    /// Numerator degrees of freedom.
    pub df_num: usize,
    /// Denominator degrees of freedom.
    pub df_denom: usize,
    /// p-value.
    pub p_value: f64,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn reset_doc(r: &Reset) -> ResetDoc {
    ResetDoc {
        powers: vec![2, 3],
        f: Number::from_f64(r.f()),
        df_num: r.df_num(),
        df_denom: r.df_denom(),
        p_value: r.p_value(),
        verdict: r.verdict().into(),
    }
}

/// Linearity checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LinearityDoc {
    /// Residual (y) against fitted value (x).
    pub residuals_vs_fitted: Outcome<SeriesDoc>,
    /// Residual against each predictor column.
    pub residuals_vs_predictors: Vec<NamedSeriesDoc>,
    /// Added-variable plot data per predictor column.
    pub added_variable: Vec<NamedOutcome<AddedVariableDoc>>,
    /// Component-plus-residual plot data per predictor column.
    pub component_residual: Vec<NamedOutcome<ComponentResidualDoc>>,
    /// RESET with squared and cubed fitted values.
    pub reset: Outcome<ResetDoc>,
}

/// The influence cut-offs in force.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ThresholdsDoc {
    /// Leverage cut-off 2p/n.
    pub hat: f64,
    /// |DFFITS| cut-off.
    pub dffits: f64,
    /// |DFBETAS| cut-off.
    pub dfbetas: f64,
    /// Cook's distance percentile (fraction) below which influence is little.
    pub cook_little: f64,
    /// Cook's distance percentile (fraction) from which influence is major.
    pub cook_major: f64,
    /// Bonferroni p below which a row is an outlier.
    pub bonferroni_alpha: f64,
    /// The size rule behind the DFFITS/DFBETAS cut-offs, in words.
    pub size_rule: String,
}

/// Influence measures of one row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InfluenceRowDoc {
    /// Region key.
    pub key: String,
    /// Leverage.
    pub hat: f64,
    /// Leverage above 2p/n.
    pub hat_flag: bool,
    /// Cook's distance.
    pub cooks_d: Number,
    /// Cook's distance as a fraction of F(p, n − p) below it.
    pub cooks_percentile: Number,
    /// `little`, `some` or `major` (null when undefined).
    pub cooks_band: Option<String>,
    /// DFFITS.
    pub dffits: Number,
    /// |DFFITS| above its cut-off.
    pub dffits_flag: bool,
    /// DFBETAS per coefficient, in the order of `names`.
    pub dfbetas: Vec<Number>,
    /// Any |DFBETAS| above its cut-off.
    pub dfbetas_flag: bool,
    /// Studentized deleted residual.
    pub studentized_deleted: Number,
    /// Unadjusted two-sided p-value of it.
    pub outlier_p: Number,
    /// Bonferroni-adjusted p-value.
    pub outlier_p_bonferroni: Number,
    /// Bonferroni p below the threshold.
    pub outlier_flag: bool,
    /// Flagged by any measure.
    pub flagged: bool,
}

/// Influence measures of every row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InfluenceDoc {
    /// Coefficient names (the order of DFBETAS).
    pub names: Vec<String>,
    /// The cut-offs.
    pub thresholds: ThresholdsDoc,
    /// One entry per row.
    pub rows: Vec<InfluenceRowDoc>,
    /// Keys of the flagged rows.
    pub flagged: Vec<String>,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn influence_doc(inf: &Influence) -> InfluenceDoc {
    let t = inf.thresholds();
    InfluenceDoc {
        names: inf.names().to_vec(),
        thresholds: ThresholdsDoc {
            hat: t.hat(),
            dffits: t.dffits(),
            dfbetas: t.dfbetas(),
            cook_little: t.cook_little(),
            cook_major: t.cook_major(),
            bonferroni_alpha: t.bonferroni_alpha(),
            size_rule: t.size_rule().to_owned(),
        },
        rows: inf
            .rows()
            .iter()
            .map(|r| InfluenceRowDoc {
                key: r.key().to_owned(),
                hat: r.hat(),
                hat_flag: r.hat_flag(),
                cooks_d: Number::from_opt(r.cooks_d()),
                cooks_percentile: Number::from_opt(r.cooks_percentile()),
                cooks_band: r.cooks_band().map(|b| b.as_str().to_owned()),
                dffits: Number::from_opt(r.dffits()),
                dffits_flag: r.dffits_flag(),
                dfbetas: r.dfbetas().map_or_else(
                    || vec![Number::Undefined; inf.names().len()],
                    |v| v.iter().copied().map(Number::from_f64).collect(),
                ),
                dfbetas_flag: r.dfbetas_flag(),
                studentized_deleted: Number::from_opt(r.student_external()),
                outlier_p: Number::from_opt(r.unadjusted_p()),
                outlier_p_bonferroni: Number::from_opt(r.bonferroni_p()),
                outlier_flag: r.outlier_flag(),
                flagged: r.flagged(),
            })
            .collect(),
        flagged: inf.flagged_keys(),
        verdict: inf.verdict().into(),
    }
}

/// One coefficient before and after leaving out the flagged rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RefitCoefficientDoc {
    /// The term.
    pub term: String,
    /// Estimate as fitted.
    pub original_estimate: f64,
    /// Standard error as fitted.
    pub original_std_error: f64,
    /// Estimate without the flagged rows.
    pub refit_estimate: f64,
    /// Standard error without the flagged rows.
    pub refit_std_error: f64,
}

/// One side of the refit comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RefitSideDoc {
    /// Rows used.
    pub rows_used: usize,
    /// R².
    pub r_squared: f64,
    /// Verdicts of the assumption checks.
    pub verdicts: Vec<NamedVerdict>,
}

fn side_doc(s: &RefitSide) -> RefitSideDoc {
    RefitSideDoc {
        rows_used: s.nobs(),
        r_squared: s.r_squared(),
        verdicts: s
            .verdicts()
            .iter()
            .map(|(c, v)| NamedVerdict { check: c.clone(), verdict: v.into() })
            .collect(),
    }
}

/// The model with and without the flagged rows, side by side.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RefitDoc {
    /// Keys of the rows left out.
    pub removed: Vec<String>,
    /// Coefficients side by side.
    pub coefficients: Vec<RefitCoefficientDoc>,
    /// The model as fitted.
    pub original: RefitSideDoc,
    /// The model without the flagged rows.
    pub refit: RefitSideDoc,
}

fn refit_doc(r: &Refit) -> RefitDoc {
    let (o, f) = (r.original(), r.refit());
    RefitDoc {
        removed: r.removed().to_vec(),
        coefficients: r
            .names()
            .iter()
            .enumerate()
            .map(|(j, term)| RefitCoefficientDoc {
                term: term.clone(),
                original_estimate: o.coefficients()[j],
                original_std_error: o.std_errors()[j],
                refit_estimate: f.coefficients()[j],
                refit_std_error: f.std_errors()[j],
            })
            .collect(),
        original: side_doc(o),
        refit: side_doc(f),
    }
}

/// Pearson correlations of the predictor columns.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CorrelationDoc {
    /// Column labels.
    pub names: Vec<String>,
    /// The matrix, row by row.
    pub matrix: Vec<Vec<f64>>,
}

fn correlation_doc(c: &Correlation) -> CorrelationDoc {
    CorrelationDoc { names: c.names().to_vec(), matrix: c.matrix().to_vec() }
}

/// One variance inflation factor.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct VifEntryDoc {
    /// Column label.
    pub name: String,
    /// The VIF ("Infinity" for an exact combination).
    pub vif: Number,
    /// R² of the column on the others.
    pub r_squared: f64,
}

/// Variance inflation factors with their verdict.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct VifDoc {
    /// One entry per predictor column.
    pub entries: Vec<VifEntryDoc>,
    /// The verdict on the largest.
    pub verdict: VerdictDoc,
}

/// Condition indices with variance-decomposition proportions.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ConditionDoc {
    /// Design column labels, the intercept included.
    pub names: Vec<String>,
    /// Singular values of the unit-length-scaled design, largest first.
    pub singular_values: Vec<f64>,
    /// Condition indices, smallest first.
    pub indices: Vec<f64>,
    /// `proportions[k][j]`: share of var(b_j) tied to component k.
    pub proportions: Vec<Vec<f64>>,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn condition_doc(c: &ConditionDiagnostics) -> ConditionDoc {
    ConditionDoc {
        names: c.names().to_vec(),
        singular_values: c.singular_values().to_vec(),
        indices: c.indices().to_vec(),
        proportions: c.proportions().to_vec(),
        verdict: c.verdict().into(),
    }
}

/// Collinearity checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CollinearityDoc {
    /// Correlations of the predictor columns.
    pub correlation: Outcome<CorrelationDoc>,
    /// Variance inflation factors.
    pub vif: Outcome<VifDoc>,
    /// Condition indices (Belsley, Kuh & Welsch 1980).
    pub condition: Outcome<ConditionDoc>,
}

/// Standard errors of one coefficient, classical and robust.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RobustRowDoc {
    /// The term.
    pub term: String,
    /// Classical standard error.
    pub classical: f64,
    /// HC0 (White 1980).
    pub hc0: f64,
    /// HC1.
    pub hc1: f64,
    /// HC2.
    pub hc2: f64,
    /// HC3 (MacKinnon & White 1985), shown beside the classical error.
    pub hc3: f64,
}

/// Heteroscedasticity-consistent standard errors.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RobustDoc {
    /// One row per coefficient.
    pub coefficients: Vec<RobustRowDoc>,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn robust_doc(r: &RobustErrors) -> RobustDoc {
    RobustDoc {
        coefficients: r
            .names()
            .iter()
            .enumerate()
            .map(|(j, term)| RobustRowDoc {
                term: term.clone(),
                classical: r.classical()[j],
                hc0: r.hc0()[j],
                hc1: r.hc1()[j],
                hc2: r.hc2()[j],
                hc3: r.hc3()[j],
            })
            .collect(),
        verdict: r.verdict().into(),
    }
}

/// The rows-per-predictor guard.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RowsGuardDoc {
    /// Rows used.
    pub rows: usize,
    /// Predictor columns.
    pub predictors: usize,
    /// Rows per predictor column.
    pub rows_per_predictor: f64,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn guard_doc(g: &RowsGuard) -> RowsGuardDoc {
    RowsGuardDoc {
        rows: g.rows(),
        predictors: g.predictors(),
        rows_per_predictor: g.rows_per_predictor(),
        verdict: g.verdict().into(),
    }
}

/// The response power profile.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PowerProfileDoc {
    /// `box_cox` or `yeo_johnson`.
    pub family: String,
    /// Grid of λ.
    pub lambdas: Vec<f64>,
    /// Profile log-likelihood at each λ.
    pub log_likelihood: Vec<f64>,
    /// The maximising λ.
    pub lambda_hat: f64,
    /// The maximum.
    pub log_likelihood_max: f64,
    /// Lower end of the 95% likelihood interval; null beyond the searched range.
    pub interval_low: Number,
    /// Upper end; null beyond the searched range.
    pub interval_high: Number,
    /// Whether λ̂ sits at the edge of the searched range.
    pub at_edge: bool,
    /// The interpretable power (−1, −½, 0, ½, 1) inside the interval nearest λ̂.
    pub suggested: Number,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn profile_doc(p: &PowerProfile) -> PowerProfileDoc {
    PowerProfileDoc {
        family: p.family().as_str().to_owned(),
        lambdas: p.lambdas().to_vec(),
        log_likelihood: p.llf().to_vec(),
        lambda_hat: p.lambda_hat(),
        log_likelihood_max: p.llf_max(),
        interval_low: Number::from_opt(p.interval().0),
        interval_high: Number::from_opt(p.interval().1),
        at_edge: p.at_edge(),
        suggested: Number::from_opt(p.suggested()),
        verdict: p.verdict().into(),
    }
}

/// Box-Tidwell power of one predictor column.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BoxTidwellDoc {
    /// First-step estimate.
    pub one_step: f64,
    /// Iterated estimate.
    pub estimate: f64,
    /// Iterations taken.
    pub iterations: usize,
    /// Whether the iteration converged.
    pub converged: bool,
    /// Score test: t of the added x·ln x term.
    pub score_t: f64,
    /// Its degrees of freedom.
    pub score_df: usize,
    /// Its p-value.
    pub score_p_value: f64,
    /// The verdict.
    pub verdict: VerdictDoc,
}

fn box_tidwell_doc(b: &BoxTidwell) -> BoxTidwellDoc {
    BoxTidwellDoc {
        one_step: b.one_step(),
        estimate: b.estimate(),
        iterations: b.iterations(),
        converged: b.converged(),
        score_t: b.score_t(),
        score_df: b.score_df(),
        score_p_value: b.score_p(),
        verdict: b.verdict().into(),
    }
}

/// A predictor column at a power.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ColumnPowerDoc {
    /// The column.
    pub column: String,
    /// The power (1 = as is, 0 = log).
    pub power: f64,
}

/// Diagnostics of a top candidate fitted to all rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CandidateSummaryDoc {
    /// R² on the candidate's own response scale.
    pub r_squared: f64,
    /// Shapiro-Wilk p-value.
    pub shapiro_p: Number,
    /// Breusch-Pagan p-value against the predictors.
    pub breusch_pagan_p: Number,
    /// RESET p-value.
    pub reset_p: Number,
    /// Largest VIF.
    pub max_vif: Number,
}

/// One candidate of the transformation search.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CandidateDoc {
    /// Rank (1 is best).
    pub rank: usize,
    /// Readable label.
    pub label: String,
    /// Response power (1 = as is, 0 = log).
    pub response_power: f64,
    /// Power of each searched column.
    pub predictor_powers: Vec<ColumnPowerDoc>,
    /// Whether this is the model as specified.
    pub current: bool,
    /// Cross-validated RMSE on the model's response scale; null when unavailable.
    pub cv_rmse: Number,
    /// Why the RMSE is missing, if it is.
    pub note: Option<String>,
    /// Diagnostics of top candidates.
    pub summary: Option<CandidateSummaryDoc>,
}

/// The ranked transformation search.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SearchDoc {
    /// The ranking criterion, in words.
    pub criterion: String,
    /// Cross-validation folds.
    pub folds: usize,
    /// Seed of the folds.
    pub seed: u64,
    /// Columns whose powers were tried.
    pub searched: Vec<String>,
    /// Every candidate, best first.
    pub candidates: Vec<CandidateDoc>,
    /// Notes on what was and was not searched.
    pub notes: Vec<String>,
}

impl SearchDoc {
    /// The document of a transformation search run on its own (for instance as a background
    /// job with other options), in the same form as the search inside the checks document.
    pub fn outcome(search: &CheckOutcome<TransformSearch>) -> Outcome<SearchDoc> {
        Outcome::map(search, search_doc)
    }
}

fn search_doc(s: &TransformSearch) -> SearchDoc {
    SearchDoc {
        criterion: s.criterion().to_owned(),
        folds: s.folds(),
        seed: s.seed(),
        searched: s.searched().to_vec(),
        candidates: s
            .candidates()
            .iter()
            .map(|c| CandidateDoc {
                rank: c.rank(),
                label: c.label().to_owned(),
                response_power: c.response_power(),
                predictor_powers: c
                    .predictor_powers()
                    .iter()
                    .map(|(column, power)| ColumnPowerDoc { column: column.clone(), power: *power })
                    .collect(),
                current: c.is_current(),
                cv_rmse: Number::from_opt(c.cv_rmse()),
                note: c.note().map(str::to_owned),
                summary: c.summary().map(|m| CandidateSummaryDoc {
                    r_squared: m.r_squared(),
                    shapiro_p: Number::from_opt(m.shapiro_p()),
                    breusch_pagan_p: Number::from_opt(m.breusch_pagan_p()),
                    reset_p: Number::from_opt(m.reset_p()),
                    max_vif: Number::from_opt(m.max_vif()),
                }),
            })
            .collect(),
        notes: s.notes().to_vec(),
    }
}

/// Transformation checks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TransformationsDoc {
    /// Box-Cox (or Yeo-Johnson) profile of the response power.
    pub response_power: Outcome<PowerProfileDoc>,
    /// Box-Tidwell powers of the positive predictor columns.
    pub box_tidwell: Vec<NamedOutcome<BoxTidwellDoc>>,
    /// The ranked search; it reports and never changes the model.
    pub search: Outcome<SearchDoc>,
}

/// The whole checks document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChecksDocument {
    /// Schema version.
    pub schema_version: String,
    /// Always `checks`.
    pub kind: String,
    /// The spec that was checked.
    pub spec: ModelSpec,
    /// Rows used by the model.
    pub rows_used: usize,
    /// Coefficients in the model.
    pub coefficients: usize,
    /// Whether the model is weighted (residual checks then use √w-scaled residuals).
    pub weighted: bool,
    /// The significance threshold of every test.
    pub alpha: f64,
    /// Every available verdict, in report order.
    pub summary: Vec<NamedVerdict>,
    /// Residuals per row.
    pub residuals: Outcome<ResidualsDoc>,
    /// Normality checks.
    pub normality: NormalityDoc,
    /// Constant-variance checks.
    pub constant_variance: VarianceDoc,
    /// Linearity checks.
    pub linearity: LinearityDoc,
    /// Influence per row.
    pub influence: Outcome<InfluenceDoc>,
    /// The model refitted without the flagged rows, beside the original.
    pub refit_without_flagged: Outcome<RefitDoc>,
    /// Collinearity checks.
    pub collinearity: CollinearityDoc,
    /// Robust standard errors.
    pub robust_errors: Outcome<RobustDoc>,
    /// The rows-per-predictor guard.
    pub rows_guard: Outcome<RowsGuardDoc>,
    /// Transformations.
    pub transformations: TransformationsDoc,
    /// The standing cautions.
    pub cautions: Vec<Caution>,
}

impl ChecksDocument {
    /// Builds the document from an engine report and the spec of the checked model.
    pub fn from_checks(checks: &Checks, spec: &ModelSpec) -> Self {
        let vif = match (checks.vif(), checks.vif_verdict()) {
            (CheckOutcome::Ok(v), CheckOutcome::Ok(verdict)) => Outcome::Ok {
                result: VifDoc { entries: v.iter().map(vif_entry).collect(), verdict: verdict.into() },
            },
            (CheckOutcome::Unavailable(r), _) | (_, CheckOutcome::Unavailable(r)) => {
                Outcome::Unavailable { reason: r.clone() }
            }
        };
        ChecksDocument {
            schema_version: SCHEMA_VERSION.to_owned(),
            kind: "checks".to_owned(),
            spec: spec.clone(),
            rows_used: checks.nobs(),
            coefficients: checks.nparams(),
            weighted: checks.weighted(),
            alpha: checks.alpha(),
            summary: checks
                .verdicts()
                .into_iter()
                .map(|(check, v)| NamedVerdict { check, verdict: v.into() })
                .collect(),
            residuals: Outcome::map(checks.residuals(), residuals_doc),
            normality: NormalityDoc {
                shapiro_wilk: Outcome::map(checks.shapiro(), shapiro_doc),
                qq_plot: Outcome::map(checks.qq(), qq_doc),
            },
            constant_variance: VarianceDoc {
                brown_forsythe: Outcome::map(checks.brown_forsythe(), brown_forsythe_doc),
                breusch_pagan_predictors: Outcome::map(checks.breusch_pagan_predictors(), breusch_pagan_doc),
                breusch_pagan_fitted: Outcome::map(checks.breusch_pagan_fitted(), breusch_pagan_doc),
            },
            linearity: LinearityDoc {
                residuals_vs_fitted: Outcome::map(checks.residuals_vs_fitted(), |p| SeriesDoc {
                    points: points(p),
                }),
                residuals_vs_predictors: checks
                    .residuals_vs_predictors()
                    .iter()
                    .map(|s| NamedSeriesDoc { name: s.name().to_owned(), points: points(s.points()) })
                    .collect(),
                added_variable: named(checks.added_variable(), added_variable_doc),
                component_residual: named(checks.component_residual(), component_doc),
                reset: Outcome::map(checks.reset(), reset_doc),
            },
            influence: Outcome::map(checks.influence(), influence_doc),
            refit_without_flagged: Outcome::map(checks.refit(), refit_doc),
            collinearity: CollinearityDoc {
                correlation: Outcome::map(checks.correlation(), correlation_doc),
                vif,
                condition: Outcome::map(checks.condition(), condition_doc),
            },
            robust_errors: Outcome::map(checks.robust(), robust_doc),
            rows_guard: Outcome::map(checks.rows_guard(), guard_doc),
            transformations: TransformationsDoc {
                response_power: Outcome::map(checks.response_power(), profile_doc),
                box_tidwell: named(checks.box_tidwell(), box_tidwell_doc),
                search: Outcome::map(checks.search(), search_doc),
            },
            cautions: standing_cautions(),
        }
    }
}

fn shapiro_doc(s: &ShapiroWilk) -> ShapiroDoc {
    ShapiroDoc { n: s.n(), w: s.w(), p_value: s.p_value(), verdict: s.verdict().into() }
}

fn vif_entry(v: &Vif) -> VifEntryDoc {
    VifEntryDoc { name: v.name().to_owned(), vif: Number::from_f64(v.vif()), r_squared: v.r_squared() }
}

#[cfg(test)]
mod tests {
    use super::*;
    use wardcast_engine::diagnostics::{self, CheckOptions};
    use wardcast_engine::{Design, Fit, FitOptions, Matrix};

    fn small_fit() -> Fit {
        let n = 24;
        let x1: Vec<f64> = (0..n).map(|i| 1.0 + f64::from(i)).collect();
        let x2: Vec<f64> = (0..n).map(|i| f64::from((i * 5) % 7)).collect();
        let y: Vec<f64> = (0..n)
            .map(|i| {
                3.0 + 2.0 * x1[i as usize].ln() + 0.4 * x2[i as usize] + 0.3 * (f64::from(i) * 1.3).sin()
            })
            .collect();
        let keys = (0..n).map(|i| format!("D{i:02}")).collect();
        let d = Design::from_matrix(
            Matrix::from_columns(&[x1, x2]),
            y,
            None,
            vec!["a".into(), "b".into()],
            keys,
            true,
        )
        .expect("design");
        Fit::new(&d, &FitOptions::default()).expect("fit")
    }

    fn same(a: &serde_json::Value, b: &serde_json::Value, at: &str) {
        use serde_json::Value;
        match (a, b) {
            (Value::Number(x), Value::Number(y)) => {
                let (x, y) = (x.as_f64().expect("f64"), y.as_f64().expect("f64"));
                assert!((x - y).abs() <= 4.0 * f64::EPSILON * y.abs(), "{at}: {x} vs {y}");
            }
            (Value::Array(x), Value::Array(y)) => {
                assert_eq!(x.len(), y.len(), "{at}: length");
                for (i, (p, q)) in x.iter().zip(y).enumerate() {
                    same(p, q, &format!("{at}[{i}]"));
                }
            }
            (Value::Object(x), Value::Object(y)) => {
                assert_eq!(x.len(), y.len(), "{at}: keys");
                for (k, p) in x {
                    same(p, &y[k], &format!("{at}.{k}"));
                }
            }
            _ => assert_eq!(a, b, "{at}"),
        }
    }

    #[test]
    fn document_round_trips_and_holds_every_check() {
        let fit = small_fit();
        let checks = diagnostics::run(&fit, &CheckOptions::default());
        let spec = ModelSpec::new("y", ["a", "b"]);
        let doc = ChecksDocument::from_checks(&checks, &spec);
        let text = serde_json::to_string(&doc).expect("serialize");
        assert!(!text.contains("NaN"));
        let back: ChecksDocument = serde_json::from_str(&text).expect("deserialize");
        // serde_json's default float parser may miss the last bit, so numbers are compared
        // with a relative tolerance of a few ulps.
        let v: serde_json::Value = serde_json::from_str(&text).expect("value");
        same(&serde_json::to_value(&back).expect("value"), &v, "$");
        assert_eq!(v["kind"], "checks");
        assert_eq!(v["normality"]["shapiro_wilk"]["status"], "ok");
        assert!(v["normality"]["shapiro_wilk"]["result"]["w"].as_f64().is_some());
        assert_eq!(v["influence"]["result"]["rows"].as_array().map(Vec::len), Some(24));
        assert!(!doc.summary.is_empty());
        for nv in &doc.summary {
            assert!(["clear", "watch", "problem"].contains(&nv.verdict.level.as_str()));
        }
    }

    #[test]
    fn unavailable_checks_carry_their_reason() {
        // Four rows: RESET and the 10-fold search cannot run; the document says why.
        let d = Design::from_matrix(
            Matrix::from_columns(&[vec![1.0, 2.0, 3.0, 5.0]]),
            vec![1.1, 1.9, 3.2, 4.8],
            None,
            vec!["x".into()],
            (0..4).map(|i| format!("k{i}")).collect(),
            true,
        )
        .expect("design");
        let fit = Fit::new(&d, &FitOptions::default()).expect("fit");
        let checks = diagnostics::run(&fit, &CheckOptions::default());
        let doc = ChecksDocument::from_checks(&checks, &ModelSpec::new("y", ["x"]));
        let v = serde_json::to_value(&doc).expect("value");
        assert_eq!(v["linearity"]["reset"]["status"], "unavailable");
        assert!(v["linearity"]["reset"]["reason"].as_str().is_some_and(|r| !r.is_empty()));
        assert_eq!(v["transformations"]["search"]["status"], "unavailable");
    }
}

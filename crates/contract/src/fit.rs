//! The fit document: coefficients, inference, sums of squares and predictions.
//!
//! Built from an engine [`Fit`](wardcast_engine::Fit) by [`FitDocument::from_fit`]. Field
//! meanings and conventions are documented in `docs/SCHEMA.md`; formulas in `docs/METHODS.md`.

use serde::{Deserialize, Serialize};
use wardcast_engine::{Fit, Prediction, SsBasis};

use crate::cautions::{Caution, standing_cautions};
use crate::numbers::Number;
use crate::spec::ModelSpec;
use crate::{Result, SCHEMA_VERSION};

/// The convention for the log-likelihood, AIC and SBC, written into every fit document.
pub const LIKELIHOOD_CONVENTION: &str = "Gaussian log-likelihood at the maximum-likelihood variance: \
ll = -n/2 (ln 2pi + ln(SSE/n) + 1) + 1/2 sum ln w_i; AIC = -2 ll + 2p; SBC = -2 ll + p ln n; \
p counts the regression coefficients (the intercept included, the variance not).";

/// A row left out of the fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DroppedRowDoc {
    /// The region key.
    pub key: String,
    /// Why: a missing value (naming the column) or the analyst's exclusion reason.
    pub reason: String,
}

/// A confidence interval at a stated level.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    /// The coverage, e.g. 0.95.
    pub level: f64,
    /// Lower end.
    pub low: f64,
    /// Upper end.
    pub high: f64,
}

/// One coefficient with its inference.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CoefficientDoc {
    /// The term: `(intercept)`, a column, `log(column)` or `column=level`.
    pub term: String,
    /// The estimate.
    pub estimate: f64,
    /// The classical standard error.
    pub std_error: f64,
    /// The t statistic; null when undefined (exact fit).
    pub t_value: Number,
    /// The two-sided p-value; null when undefined.
    pub p_value: Number,
    /// The confidence interval at the spec's level.
    pub interval: Interval,
}

/// Sums of squares and the basis of the total.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SumsOfSquares {
    /// `about_mean` with an intercept, `about_zero` without.
    pub basis: String,
    /// Error sum of squares (SSE), weighted under WLS.
    pub error: f64,
    /// Regression sum of squares (SSR).
    pub regression: f64,
    /// Total sum of squares (SSTO) on the stated basis.
    pub total: f64,
}

/// The global F test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OverallF {
    /// The statistic; "Infinity" for an exact fit, null without model degrees of freedom.
    pub statistic: Number,
    /// Numerator degrees of freedom.
    pub df_model: usize,
    /// Denominator degrees of freedom.
    pub df_residual: usize,
    /// Upper-tail p-value.
    pub p_value: Number,
}

/// A row of the sequential (type I) ANOVA table or of the partial F tests.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TermTest {
    /// The term.
    pub term: String,
    /// Its degrees of freedom.
    pub df: usize,
    /// The sum of squares it adds (sequentially, or given all others).
    pub sum_sq: f64,
    /// F statistic against the full model's MSE.
    pub f: Number,
    /// Upper-tail p-value.
    pub p_value: Number,
}

/// Likelihood-based criteria.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Likelihood {
    /// The log-likelihood.
    pub log_likelihood: f64,
    /// Akaike's information criterion.
    pub aic: f64,
    /// Schwarz's Bayesian criterion (SBC, also called BIC).
    pub sbc: f64,
    /// How the three are computed.
    pub convention: String,
}

/// Per-row values of the fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RowDoc {
    /// The region key.
    pub key: String,
    /// The observed response (after its transform, if any).
    pub observed: f64,
    /// The fitted value.
    pub fitted: f64,
    /// The raw residual.
    pub residual: f64,
    /// The leverage (hat value).
    pub leverage: f64,
}

/// The whole fit document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitDocument {
    /// Schema version.
    pub schema_version: String,
    /// Always `fit`.
    pub kind: String,
    /// The spec that was fitted.
    pub spec: ModelSpec,
    /// Rows used in the fit.
    pub rows_used: usize,
    /// Rows left out, each with its reason.
    pub rows_dropped: Vec<DroppedRowDoc>,
    /// Coefficients, intercept first when present.
    pub coefficients: Vec<CoefficientDoc>,
    /// The covariance matrix of the coefficients, in the order of `coefficients`.
    pub covariance: Vec<Vec<f64>>,
    /// Sums of squares.
    pub sums_of_squares: SumsOfSquares,
    /// Model degrees of freedom.
    pub df_model: usize,
    /// Residual degrees of freedom.
    pub df_residual: usize,
    /// Mean squared error.
    pub mse: f64,
    /// Residual standard deviation, sqrt(MSE).
    pub residual_sd: f64,
    /// R².
    pub r_squared: f64,
    /// Adjusted R².
    pub adj_r_squared: f64,
    /// The global F test.
    pub overall_f: OverallF,
    /// Sequential (type I) sums of squares, term by term in spec order.
    pub sequential_anova: Vec<TermTest>,
    /// Extra-sum-of-squares F test of each term given all others.
    pub partial_f: Vec<TermTest>,
    /// Log-likelihood, AIC and SBC.
    pub likelihood: Likelihood,
    /// Whether the fit is exact (SSE = 0).
    pub exact_fit: bool,
    /// Per-row values.
    pub rows: Vec<RowDoc>,
    /// Notes on undefined values and conventions.
    pub notes: Vec<String>,
    /// The standing cautions.
    pub cautions: Vec<Caution>,
}

impl FitDocument {
    /// Builds the document from a fit and the spec it came from.
    pub fn from_fit(fit: &Fit, spec: &ModelSpec) -> Result<Self> {
        let design = fit.design();
        let ci = fit.conf_int(spec.level)?;
        let names = design.column_names();
        let coefficients = names
            .iter()
            .enumerate()
            .map(|(j, term)| CoefficientDoc {
                term: term.clone(),
                estimate: fit.coefficients()[j],
                std_error: fit.std_errors()[j],
                t_value: Number::from_opt(fit.t_values()[j]),
                p_value: Number::from_opt(fit.p_values()[j]),
                interval: Interval { level: spec.level, low: ci[j].0, high: ci[j].1 },
            })
            .collect();
        let cov = fit.covariance();
        let covariance =
            (0..cov.nrows()).map(|i| (0..cov.ncols()).map(|j| cov.get(i, j)).collect()).collect();
        let rows = design
            .keys()
            .iter()
            .enumerate()
            .map(|(i, key)| RowDoc {
                key: key.clone(),
                observed: design.y()[i],
                fitted: fit.fitted()[i],
                residual: fit.residuals()[i],
                leverage: fit.leverages()[i],
            })
            .collect();
        let basis = match fit.ss_basis() {
            SsBasis::AboutMean => "about_mean",
            SsBasis::AboutZero => "about_zero",
        };
        Ok(Self {
            schema_version: SCHEMA_VERSION.into(),
            kind: "fit".into(),
            spec: spec.clone(),
            rows_used: fit.nobs(),
            rows_dropped: design
                .dropped()
                .iter()
                .map(|d| DroppedRowDoc { key: d.key.clone(), reason: d.reason.clone() })
                .collect(),
            coefficients,
            covariance,
            sums_of_squares: SumsOfSquares {
                basis: basis.into(),
                error: fit.sse(),
                regression: fit.ssr(),
                total: fit.ssto(),
            },
            df_model: fit.df_model(),
            df_residual: fit.df_resid(),
            mse: fit.mse(),
            residual_sd: fit.sigma(),
            r_squared: fit.r_squared(),
            adj_r_squared: fit.adj_r_squared(),
            overall_f: OverallF {
                statistic: Number::from_opt(fit.f_statistic()),
                df_model: fit.df_model(),
                df_residual: fit.df_resid(),
                p_value: Number::from_opt(fit.f_p_value()),
            },
            sequential_anova: fit
                .sequential_anova()
                .iter()
                .map(|r| TermTest {
                    term: r.term.clone(),
                    df: r.df,
                    sum_sq: r.ss,
                    f: Number::from_opt(r.f),
                    p_value: Number::from_opt(r.p),
                })
                .collect(),
            partial_f: fit
                .partial_f_tests()
                .iter()
                .map(|r| TermTest {
                    term: r.term.clone(),
                    df: r.df,
                    sum_sq: r.extra_ss,
                    f: Number::from_opt(r.f),
                    p_value: Number::from_opt(r.p),
                })
                .collect(),
            likelihood: Likelihood {
                log_likelihood: fit.log_likelihood(),
                aic: fit.aic(),
                sbc: fit.bic(),
                convention: LIKELIHOOD_CONVENTION.into(),
            },
            exact_fit: fit.is_exact_fit(),
            rows,
            notes: fit.notes().to_vec(),
            cautions: standing_cautions(),
        })
    }
}

/// One prediction for a new or hypothetical area.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PredictionDoc {
    /// A label for the row (a district key or a scenario name).
    pub label: String,
    /// The predicted mean response.
    pub fit: f64,
    /// Standard error of the mean prediction.
    pub se_mean: f64,
    /// Confidence interval for the mean.
    pub mean_interval: Interval,
    /// Standard error for a new area's value.
    pub se_new: f64,
    /// Prediction interval for a new area.
    pub new_area_interval: Interval,
}

impl PredictionDoc {
    /// Maps an engine prediction.
    pub fn new(label: impl Into<String>, p: &Prediction, level: f64) -> Self {
        Self {
            label: label.into(),
            fit: p.fit,
            se_mean: p.se_mean,
            mean_interval: Interval { level, low: p.mean_ci.0, high: p.mean_ci.1 },
            se_new: p.se_pred,
            new_area_interval: Interval { level, low: p.pred_int.0, high: p.pred_int.1 },
        }
    }
}

//! Model checks: assumption tests, influence, collinearity, robust errors and transformations.
//!
//! One entry point, [`run`], takes a fitted model and returns an immutable [`Checks`] report.
//! Every check is a [`CheckOutcome`]: its result (numbers plus a plain-language [`Verdict`]) or
//! the reason it cannot be computed for this model (too few rows, zero variance, a sample size
//! outside a test's range), so one unavailable check never fails the whole report.
//!
//! Under weighted least squares every residual-based check works on the transformed model
//! `√w·y = √w·X β + ε`, whose errors have constant variance under the model: residuals are the
//! Pearson-type `√wᵢ·eᵢ`, and the design is `√w·X`. Fitted values in plots stay on the response
//! scale. Formulas and their sources are listed in docs/METHODS.md.

pub mod collinearity;
pub mod influence;
pub mod linearity;
pub mod normality;
pub mod residuals;
pub mod robust;
pub mod transform;
pub mod variance;
pub mod verdict;

pub use collinearity::{ConditionDiagnostics, Correlation, Vif};
pub use influence::{Influence, InfluenceBand, InfluenceRow, InfluenceThresholds, Refit, RefitSide};
pub use linearity::{AddedVariable, ComponentResidual, PlotPoint, PredictorResiduals, Reset};
pub use normality::{QqPlot, QqPoint, ShapiroWilk};
pub use residuals::ResidualTable;
pub use robust::{RobustErrors, RowsGuard};
pub use transform::{
    BoxTidwell, CandidateSummary, PowerFamily, PowerProfile, SearchCandidate, TransformSearch,
};
pub use variance::{BreuschPagan, BrownForsythe};
pub use verdict::{Verdict, VerdictLevel};

use std::sync::atomic::AtomicBool;

use crate::error::{EngineError, Result};
use crate::fit::{Fit, FitOptions};
use crate::linalg::{LeastSquares, PivotedQr, QrOptions};
use crate::matrix::Matrix;

/// The result of one check: its value, or the reason it is not available for this model.
#[derive(Debug, Clone, PartialEq)]
pub enum CheckOutcome<T> {
    /// The check was computed.
    Ok(T),
    /// The check could not be computed; the message says why in plain words.
    Unavailable(String),
}

impl<T> CheckOutcome<T> {
    /// The value, when the check was computed.
    pub fn value(&self) -> Option<&T> {
        match self {
            CheckOutcome::Ok(v) => Some(v),
            CheckOutcome::Unavailable(_) => None,
        }
    }

    /// The reason, when the check was not computed.
    pub fn reason(&self) -> Option<&str> {
        match self {
            CheckOutcome::Ok(_) => None,
            CheckOutcome::Unavailable(r) => Some(r),
        }
    }

    /// Whether the check was computed.
    pub fn is_ok(&self) -> bool {
        matches!(self, CheckOutcome::Ok(_))
    }

    /// Converts a `Result` whose error is a plain message.
    pub(crate) fn from_result(r: std::result::Result<T, String>) -> Self {
        match r {
            Ok(v) => CheckOutcome::Ok(v),
            Err(e) => CheckOutcome::Unavailable(e),
        }
    }
}

/// A check together with the design column or predictor it is about.
#[derive(Debug, Clone, PartialEq)]
pub struct Named<T> {
    name: String,
    outcome: CheckOutcome<T>,
}

impl<T> Named<T> {
    pub(crate) fn new(name: impl Into<String>, outcome: CheckOutcome<T>) -> Self {
        Named { name: name.into(), outcome }
    }

    /// The column or predictor label.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The check.
    pub fn outcome(&self) -> &CheckOutcome<T> {
        &self.outcome
    }
}

/// How the DFFITS and DFBETAS cut-offs are chosen from the size of the data.
///
/// Kutner, Nachtsheim, Neter & Li (2004), *Applied Linear Statistical Models*, 5th ed., §10.4,
/// give |DFFITS| > 1 and |DFBETAS| > 1 for small to medium data sets and 2·√(p/n) and 2/√n for
/// large ones, without fixing where "large" starts; the boundary is our choice and is stated in
/// every report.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SizeRule {
    /// Small/medium cut-offs (1 and 1) when `n ≤ small_max_rows`, large-data cut-offs otherwise.
    ByRows {
        /// The largest row count treated as small or medium data.
        small_max_rows: usize,
    },
    /// Always the small/medium cut-offs.
    SmallOrMedium,
    /// Always the large-data cut-offs.
    Large,
}

/// Options of [`run`]. Build with [`CheckOptions::default`] and the validating `with_…` methods.
#[derive(Debug, Clone)]
pub struct CheckOptions {
    alpha: f64,
    size_rule: SizeRule,
    cv_folds: usize,
    cv_seed: u64,
    lambda_range: (f64, f64),
    top_candidates: usize,
    fit: FitOptions,
}

impl Default for CheckOptions {
    fn default() -> Self {
        CheckOptions {
            alpha: 0.05,
            size_rule: SizeRule::ByRows { small_max_rows: 100 },
            cv_folds: 10,
            cv_seed: 20_250_601,
            lambda_range: (-3.0, 3.0),
            top_candidates: 3,
            fit: FitOptions::default(),
        }
    }
}

impl CheckOptions {
    /// Sets the significance threshold of every test; must lie strictly between 0 and 0.5.
    pub fn with_alpha(mut self, alpha: f64) -> Result<Self> {
        if !(alpha > 0.0 && alpha < 0.5) {
            return Err(bad_option(
                "alpha",
                format!("must lie strictly between 0 and 0.5; {alpha} was given"),
            ));
        }
        self.alpha = alpha;
        Ok(self)
    }

    /// Sets how the DFFITS and DFBETAS cut-offs depend on the row count.
    pub fn with_size_rule(mut self, rule: SizeRule) -> Self {
        self.size_rule = rule;
        self
    }

    /// Sets the number of cross-validation folds of the transformation search (2 to 100).
    pub fn with_cv_folds(mut self, folds: usize) -> Result<Self> {
        if !(2..=100).contains(&folds) {
            return Err(bad_option("cv_folds", format!("must be between 2 and 100; {folds} was given")));
        }
        self.cv_folds = folds;
        Ok(self)
    }

    /// Sets the seed of the cross-validation folds (recorded in the report).
    pub fn with_cv_seed(mut self, seed: u64) -> Self {
        self.cv_seed = seed;
        self
    }

    /// Sets the range of powers searched by the Box-Cox / Yeo-Johnson profile.
    pub fn with_lambda_range(mut self, lo: f64, hi: f64) -> Result<Self> {
        if !(lo.is_finite() && hi.is_finite() && lo <= -1.0 && hi >= 1.0 && hi - lo <= 20.0) {
            return Err(bad_option(
                "lambda_range",
                format!("must be finite, include -1 to 1 and span at most 20; {lo} to {hi} was given"),
            ));
        }
        self.lambda_range = (lo, hi);
        Ok(self)
    }

    /// Sets how many of the best transformation candidates get a diagnostics summary (0 to 20).
    pub fn with_top_candidates(mut self, k: usize) -> Result<Self> {
        if k > 20 {
            return Err(bad_option("top_candidates", format!("must be at most 20; {k} was given")));
        }
        self.top_candidates = k;
        Ok(self)
    }

    /// Sets the fit options used for the refit without flagged rows.
    pub fn with_fit_options(mut self, fit: FitOptions) -> Self {
        self.fit = fit;
        self
    }

    /// The significance threshold.
    pub fn alpha(&self) -> f64 {
        self.alpha
    }

    /// The DFFITS/DFBETAS size rule.
    pub fn size_rule(&self) -> SizeRule {
        self.size_rule
    }

    /// Cross-validation folds of the transformation search.
    pub fn cv_folds(&self) -> usize {
        self.cv_folds
    }

    /// Seed of the cross-validation folds.
    pub fn cv_seed(&self) -> u64 {
        self.cv_seed
    }

    /// Range of powers of the response profile.
    pub fn lambda_range(&self) -> (f64, f64) {
        self.lambda_range
    }

    /// How many of the best transformation candidates get a diagnostics summary.
    pub fn top_candidates(&self) -> usize {
        self.top_candidates
    }
}

fn bad_option(option: &str, reason: String) -> EngineError {
    EngineError::BadCheckOption { option: option.to_owned(), reason }
}

/// The whole diagnostics report of one fitted model. Immutable; read it through the getters.
#[derive(Debug, Clone)]
pub struct Checks {
    alpha: f64,
    nobs: usize,
    nparams: usize,
    weighted: bool,
    residuals: CheckOutcome<ResidualTable>,
    shapiro: CheckOutcome<ShapiroWilk>,
    qq: CheckOutcome<QqPlot>,
    brown_forsythe: CheckOutcome<BrownForsythe>,
    bp_predictors: CheckOutcome<BreuschPagan>,
    bp_fitted: CheckOutcome<BreuschPagan>,
    vs_fitted: CheckOutcome<Vec<PlotPoint>>,
    vs_predictors: Vec<PredictorResiduals>,
    added_variable: Vec<Named<AddedVariable>>,
    component_residual: Vec<Named<ComponentResidual>>,
    reset: CheckOutcome<Reset>,
    influence: CheckOutcome<Influence>,
    refit: CheckOutcome<Refit>,
    correlation: CheckOutcome<Correlation>,
    vif: CheckOutcome<Vec<Vif>>,
    vif_verdict: CheckOutcome<Verdict>,
    condition: CheckOutcome<ConditionDiagnostics>,
    robust: CheckOutcome<RobustErrors>,
    guard: CheckOutcome<RowsGuard>,
    response_power: CheckOutcome<PowerProfile>,
    box_tidwell: Vec<Named<BoxTidwell>>,
    search: CheckOutcome<TransformSearch>,
}

impl Checks {
    /// The significance threshold the tests were judged at.
    pub fn alpha(&self) -> f64 {
        self.alpha
    }
    /// Rows used by the model.
    pub fn nobs(&self) -> usize {
        self.nobs
    }
    /// Regression coefficients in the model (including the intercept).
    pub fn nparams(&self) -> usize {
        self.nparams
    }
    /// Whether the model is weighted (residual checks then use √w-scaled residuals).
    pub fn weighted(&self) -> bool {
        self.weighted
    }
    /// Raw, internally and externally studentized residuals with hat values, per row.
    pub fn residuals(&self) -> &CheckOutcome<ResidualTable> {
        &self.residuals
    }
    /// The Shapiro-Wilk test of the residuals.
    pub fn shapiro(&self) -> &CheckOutcome<ShapiroWilk> {
        &self.shapiro
    }
    /// Normal quantile plot data.
    pub fn qq(&self) -> &CheckOutcome<QqPlot> {
        &self.qq
    }
    /// The Brown-Forsythe test of constant variance (split at the median fitted value).
    pub fn brown_forsythe(&self) -> &CheckOutcome<BrownForsythe> {
        &self.brown_forsythe
    }
    /// Koenker's studentized Breusch-Pagan test against the predictors.
    pub fn breusch_pagan_predictors(&self) -> &CheckOutcome<BreuschPagan> {
        &self.bp_predictors
    }
    /// Koenker's studentized Breusch-Pagan test against the fitted values.
    pub fn breusch_pagan_fitted(&self) -> &CheckOutcome<BreuschPagan> {
        &self.bp_fitted
    }
    /// Residual-versus-fitted plot data.
    pub fn residuals_vs_fitted(&self) -> &CheckOutcome<Vec<PlotPoint>> {
        &self.vs_fitted
    }
    /// Residual-versus-predictor plot data, one series per design column.
    pub fn residuals_vs_predictors(&self) -> &[PredictorResiduals] {
        &self.vs_predictors
    }
    /// Added-variable (partial regression) plot data, one per design column.
    pub fn added_variable(&self) -> &[Named<AddedVariable>] {
        &self.added_variable
    }
    /// Component-plus-residual plot data, one per design column.
    pub fn component_residual(&self) -> &[Named<ComponentResidual>] {
        &self.component_residual
    }
    /// Ramsey's RESET test with the squared and cubed fitted values.
    pub fn reset(&self) -> &CheckOutcome<Reset> {
        &self.reset
    }
    /// Influence measures per row, with flags.
    pub fn influence(&self) -> &CheckOutcome<Influence> {
        &self.influence
    }
    /// The model refitted without the flagged rows, beside the original.
    pub fn refit(&self) -> &CheckOutcome<Refit> {
        &self.refit
    }
    /// Pearson correlations of the predictor columns.
    pub fn correlation(&self) -> &CheckOutcome<Correlation> {
        &self.correlation
    }
    /// Variance inflation factors, one per predictor column.
    pub fn vif(&self) -> &CheckOutcome<Vec<Vif>> {
        &self.vif
    }
    /// The overall verdict on the variance inflation factors.
    pub fn vif_verdict(&self) -> &CheckOutcome<Verdict> {
        &self.vif_verdict
    }
    /// Condition indices with variance-decomposition proportions.
    pub fn condition(&self) -> &CheckOutcome<ConditionDiagnostics> {
        &self.condition
    }
    /// Heteroscedasticity-consistent standard errors HC0–HC3 beside the classical ones.
    pub fn robust(&self) -> &CheckOutcome<RobustErrors> {
        &self.robust
    }
    /// The rows-per-predictor guard.
    pub fn rows_guard(&self) -> &CheckOutcome<RowsGuard> {
        &self.guard
    }
    /// The Box-Cox (or Yeo-Johnson) profile of the response power.
    pub fn response_power(&self) -> &CheckOutcome<PowerProfile> {
        &self.response_power
    }
    /// Box-Tidwell power estimates, one per positive predictor column.
    pub fn box_tidwell(&self) -> &[Named<BoxTidwell>] {
        &self.box_tidwell
    }
    /// The ranked transformation search (never applied to the model).
    pub fn search(&self) -> &CheckOutcome<TransformSearch> {
        &self.search
    }

    /// Every available verdict with a short name of its check, in report order.
    pub fn verdicts(&self) -> Vec<(String, &Verdict)> {
        let candidates: [(&str, Option<&Verdict>); 11] = [
            ("shapiro_wilk", self.shapiro.value().map(ShapiroWilk::verdict)),
            ("brown_forsythe", self.brown_forsythe.value().map(BrownForsythe::verdict)),
            ("breusch_pagan_predictors", self.bp_predictors.value().map(BreuschPagan::verdict)),
            ("breusch_pagan_fitted", self.bp_fitted.value().map(BreuschPagan::verdict)),
            ("reset", self.reset.value().map(Reset::verdict)),
            ("influence", self.influence.value().map(Influence::verdict)),
            ("vif", self.vif_verdict.value()),
            ("condition", self.condition.value().map(ConditionDiagnostics::verdict)),
            ("robust", self.robust.value().map(RobustErrors::verdict)),
            ("rows_guard", self.guard.value().map(RowsGuard::verdict)),
            ("response_power", self.response_power.value().map(PowerProfile::verdict)),
        ];
        let mut out: Vec<(String, &Verdict)> =
            candidates.into_iter().filter_map(|(name, v)| v.map(|v| (name.to_owned(), v))).collect();
        for bt in &self.box_tidwell {
            if let Some(v) = bt.outcome().value() {
                out.push((format!("box_tidwell:{}", bt.name()), v.verdict()));
            }
        }
        out
    }
}

/// Runs every check on a fitted model. Never fails: a check that cannot be computed is
/// reported as [`CheckOutcome::Unavailable`] with the reason.
pub fn run(fit: &Fit, opts: &CheckOptions) -> Checks {
    let w = Working::from_fit(fit);
    let alpha = opts.alpha;
    let residuals = residuals::residual_table(&w);
    let shapiro = normality::shapiro_check(&w, alpha);
    let qq = CheckOutcome::from_result(normality::qq_plot(&w));
    let brown_forsythe = variance::brown_forsythe_check(&w, alpha);
    let bp_predictors = variance::breusch_pagan_predictors(&w, alpha);
    let bp_fitted = variance::breusch_pagan_fitted(&w, alpha);
    let vs_fitted = linearity::residuals_vs_fitted(&w);
    let vs_predictors = linearity::residuals_vs_predictors(&w);
    let added_variable = linearity::added_variables(&w);
    let component_residual = linearity::component_residuals(&w);
    let reset = linearity::reset_check(&w, alpha);
    let influence = influence::influence_check(&w, opts);
    let refit = influence::refit_without_flagged(fit, &w, &influence, opts);
    let correlation = collinearity::correlation(&w);
    let vif = collinearity::vifs(&w);
    let vif_verdict = match &vif {
        CheckOutcome::Ok(v) => CheckOutcome::Ok(collinearity::vif_verdict(v)),
        CheckOutcome::Unavailable(r) => CheckOutcome::Unavailable(r.clone()),
    };
    let condition = collinearity::condition_check(&w);
    let robust = robust::robust_check(&w, alpha);
    let guard = robust::rows_guard(&w);
    let response_power = transform::response_power_check(&w, opts);
    let box_tidwell = transform::box_tidwell_checks(&w, alpha);
    // Without a cancel flag the search always finishes.
    let search = transform::search(&w, &response_power, opts, SearchControl::default())
        .unwrap_or_else(|_| CheckOutcome::Unavailable("the search was cancelled".to_owned()));
    Checks {
        alpha,
        nobs: w.n,
        nparams: w.p,
        weighted: w.weights.is_some(),
        residuals,
        shapiro,
        qq,
        brown_forsythe,
        bp_predictors,
        bp_fitted,
        vs_fitted,
        vs_predictors,
        added_variable,
        component_residual,
        reset,
        influence,
        refit,
        correlation,
        vif,
        vif_verdict,
        condition,
        robust,
        guard,
        response_power,
        box_tidwell,
        search,
    }
}

/// Progress reporting and cancellation of a transformation search run on its own with
/// [`transform_search`]. The default reports nothing and cannot be cancelled.
#[derive(Clone, Copy, Default)]
pub struct SearchControl<'a> {
    /// Called after every step with `(done, total)`; `total` stays the same for the whole run
    /// and `done` counts from 1 up to it, one step at a time.
    pub progress: Option<&'a (dyn Fn(usize, usize) + Sync)>,
    /// When this flag becomes true the search stops with [`EngineError::Cancelled`] before its
    /// next step.
    pub cancel: Option<&'a AtomicBool>,
}

impl std::fmt::Debug for SearchControl<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SearchControl")
            .field("progress", &self.progress.is_some())
            .field("cancel", &self.cancel.is_some())
            .finish()
    }
}

/// Runs only the transformation search of [`run`] (with the response power profile it starts
/// from), with the same options giving the same result as `run(fit, opts).search()`, while
/// reporting progress and watching a cancel flag. Fails only with [`EngineError::Cancelled`].
pub fn transform_search(
    fit: &Fit,
    opts: &CheckOptions,
    control: SearchControl<'_>,
) -> Result<CheckOutcome<TransformSearch>> {
    let w = Working::from_fit(fit);
    let response_power = transform::response_power_check(&w, opts);
    transform::search(&w, &response_power, opts, control).map_err(|_| EngineError::Cancelled)
}

/// The quantities every check works from, on the √w-scaled model (see the module notes).
#[derive(Debug, Clone)]
pub(crate) struct Working {
    /// Region key of each row.
    pub(crate) keys: Vec<String>,
    /// Design column labels.
    pub(crate) names: Vec<String>,
    /// Index of the intercept column, if any.
    pub(crate) intercept: Option<usize>,
    /// The design as given (unscaled).
    pub(crate) x_raw: Matrix,
    /// The response as given (unscaled).
    pub(crate) y_raw: Vec<f64>,
    /// Case weights, if any.
    pub(crate) weights: Option<Vec<f64>>,
    /// `√w·X`.
    pub(crate) x: Matrix,
    /// `√w·y`.
    pub(crate) y: Vec<f64>,
    /// Coefficients.
    pub(crate) coef: Vec<f64>,
    /// Fitted values `Xβ` on the response scale.
    pub(crate) fitted: Vec<f64>,
    /// Raw residuals `y − Xβ`.
    pub(crate) resid_raw: Vec<f64>,
    /// `√w·e`.
    pub(crate) resid: Vec<f64>,
    /// Leverages of `√w·X`.
    pub(crate) hat: Vec<f64>,
    /// `Σ w e²`.
    pub(crate) sse: f64,
    /// Rows.
    pub(crate) n: usize,
    /// Coefficients (columns of the design).
    pub(crate) p: usize,
    /// QR factorisation of `√w·X`.
    pub(crate) qr: PivotedQr,
    /// Whether the residuals are all (numerically) zero.
    pub(crate) exact: bool,
    /// Per design column: a numeric predictor entered without a transform (the search may try
    /// powers of it).
    pub(crate) untransformed: Vec<bool>,
    /// A note on the response scale when the spec transforms the response.
    pub(crate) response_note: Option<String>,
}

impl Working {
    /// Builds the working quantities from a fit.
    pub(crate) fn from_fit(fit: &Fit) -> Working {
        let d = fit.design();
        let intercept = if d.has_intercept() {
            d.column_names().iter().position(|c| c == crate::INTERCEPT_LABEL)
        } else {
            None
        };
        let mut w = Working::assemble(
            d.x().clone(),
            d.y().to_vec(),
            d.weights().map(<[f64]>::to_vec),
            d.column_names().to_vec(),
            d.keys().to_vec(),
            intercept,
            fit.coefficients().to_vec(),
        );
        w.exact = w.exact || fit.is_exact_fit();
        let mut untransformed = vec![false; w.p];
        for (term, kind) in d.terms().iter().zip(d.term_kinds()) {
            if let crate::design::TermKind::Numeric { transform: None, .. } = kind {
                for j in term.columns.clone() {
                    untransformed[j] = true;
                }
            }
        }
        w.untransformed = untransformed;
        if d.spec().response_transform.is_some() {
            w.response_note = Some(format!(
                "The response enters the model as {}; the search works on that scale.",
                d.spec().response_label()
            ));
        }
        w
    }

    /// Fits `y` on `x` by least squares and builds the working quantities (used for
    /// transformation candidates). Fails with a plain message when the design is rank deficient
    /// or has no residual degrees of freedom.
    pub(crate) fn fit_parts(
        x: Matrix,
        y: Vec<f64>,
        weights: Option<Vec<f64>>,
        names: Vec<String>,
        keys: Vec<String>,
        intercept: Option<usize>,
    ) -> std::result::Result<Working, String> {
        let (xs, ys) = scale_by_weights(&x, &y, weights.as_deref());
        let ls = least_squares(&xs, &ys)?;
        Ok(Working::assemble(x, y, weights, names, keys, intercept, ls.1.coefficients))
    }

    fn assemble(
        x_raw: Matrix,
        y_raw: Vec<f64>,
        weights: Option<Vec<f64>>,
        names: Vec<String>,
        keys: Vec<String>,
        intercept: Option<usize>,
        coef: Vec<f64>,
    ) -> Working {
        let (x, y) = scale_by_weights(&x_raw, &y_raw, weights.as_deref());
        let qr = PivotedQr::factor(&x, &QrOptions::default());
        let fitted = x_raw.mul_vec(&coef);
        let resid_raw: Vec<f64> = y_raw.iter().zip(&fitted).map(|(a, b)| a - b).collect();
        let resid: Vec<f64> = match &weights {
            Some(w) => resid_raw.iter().zip(w).map(|(e, w)| e * w.sqrt()).collect(),
            None => resid_raw.clone(),
        };
        let hat = qr.leverages();
        let sse = crate::linalg::dot_dd(&resid, &resid);
        let n = x_raw.nrows();
        let p = x_raw.ncols();
        let yy = crate::linalg::dot_dd(&y, &y);
        let exact = sse <= 1e-24 * yy.max(f64::MIN_POSITIVE);
        Working {
            keys,
            names,
            intercept,
            x_raw,
            y_raw,
            weights,
            x,
            y,
            coef,
            fitted,
            resid_raw,
            resid,
            hat,
            sse,
            n,
            p,
            qr,
            exact,
            untransformed: vec![true; p],
            response_note: None,
        }
    }

    /// Residual degrees of freedom.
    pub(crate) fn df_resid(&self) -> usize {
        self.n.saturating_sub(self.p)
    }

    /// The residual mean square `Σ w e² / (n − p)`.
    pub(crate) fn mse(&self) -> f64 {
        self.sse / self.df_resid().max(1) as f64
    }

    /// Indices of the design columns other than the intercept.
    pub(crate) fn predictor_columns(&self) -> Vec<usize> {
        (0..self.p).filter(|&j| Some(j) != self.intercept).collect()
    }

    /// A plain message when the residuals carry no information (exact fit).
    pub(crate) fn residual_problem(&self) -> Option<String> {
        if self.df_resid() == 0 {
            return Some(format!(
                "the model has no residual degrees of freedom ({} rows, {} coefficients)",
                self.n, self.p
            ));
        }
        if self.exact {
            return Some(
                "the model fits every row exactly, so its residuals carry no information".to_owned(),
            );
        }
        None
    }
}

/// `√w·X` and `√w·y` (copies of `x` and `y` without weights).
pub(crate) fn scale_by_weights(x: &Matrix, y: &[f64], weights: Option<&[f64]>) -> (Matrix, Vec<f64>) {
    match weights {
        None => (x.clone(), y.to_vec()),
        Some(w) => {
            let sw: Vec<f64> = w.iter().map(|v| v.sqrt()).collect();
            let mut xs = x.clone();
            for j in 0..xs.ncols() {
                for (v, s) in xs.column_mut(j).iter_mut().zip(&sw) {
                    *v *= s;
                }
            }
            let ys = y.iter().zip(&sw).map(|(a, s)| a * s).collect();
            (xs, ys)
        }
    }
}

/// Least squares of `y` on `x` by pivoted QR; fails with a plain message on rank deficiency or
/// when there are no more rows than columns.
pub(crate) fn least_squares(x: &Matrix, y: &[f64]) -> std::result::Result<(PivotedQr, LeastSquares), String> {
    if x.nrows() <= x.ncols() {
        return Err(format!(
            "{} rows are not enough for a regression with {} coefficients",
            x.nrows(),
            x.ncols()
        ));
    }
    let qr = PivotedQr::factor(x, &QrOptions::default());
    if qr.rank() < x.ncols() {
        return Err("the regression needed for this check has linearly dependent columns".to_owned());
    }
    let ls = qr.least_squares(y);
    Ok((qr, ls))
}

/// The sum of squares of a slice, compensated.
pub(crate) fn sum_sq(v: &[f64]) -> f64 {
    crate::linalg::dot_dd(v, v)
}

/// The mean of a non-empty slice.
pub(crate) fn mean(v: &[f64]) -> f64 {
    crate::linalg::sum_dd(v.iter().copied()) / v.len() as f64
}

/// The sum of squared deviations from the mean.
pub(crate) fn centered_ss(v: &[f64]) -> f64 {
    let m = mean(v);
    v.iter().map(|a| (a - m) * (a - m)).sum()
}

/// The median of a non-empty slice (the mean of the two middle values for an even count).
pub(crate) fn median(v: &[f64]) -> f64 {
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    let n = s.len();
    if n % 2 == 1 { s[n / 2] } else { 0.5 * (s[n / 2 - 1] + s[n / 2]) }
}

/// Formats a number for a verdict sentence with four significant digits.
pub(crate) fn fmt4(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let mag = v.abs().log10().floor() as i32;
    if (-3..5).contains(&mag) {
        let decimals = (3 - mag).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.3e}")
    }
}

/// Whether `v` is a number above zero (false for NaN).
pub(crate) fn positive(v: f64) -> bool {
    v > 0.0
}

//! Ordinary and weighted least-squares fits with their inference: coefficients, standard errors,
//! t and F tests, intervals, sums of squares, sequential ANOVA, partial F tests, information
//! criteria and predictions. Formulas and sources are listed in `docs/METHODS.md`.

use crate::INTERCEPT_LABEL;
use crate::design::Design;
use crate::dist;
use crate::error::{EngineError, Result};
use std::borrow::Cow;

use crate::linalg::{PivotedQr, QrOptions, dot_dd, sum_dd};
use crate::matrix::Matrix;

/// Below this ratio `SSE / Σwy²` a fit is treated as exact: the residuals are rounding noise of
/// the data (a residual norm ten orders of magnitude below the response norm).
pub const EXACT_FIT_RATIO: f64 = 1e-20;

/// Below this remaining length (unit-length scale) a note warns of near collinearity.
const NEAR_COLLINEAR_NOTE: f64 = 1e-6;

/// The basis of the total sum of squares.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SsBasis {
    /// About the (weighted) mean of the response: the model has an intercept.
    AboutMean,
    /// About zero (uncentred): the model has no intercept.
    AboutZero,
}

/// Options of a fit.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct FitOptions {
    /// Options of the QR factorisation (rank tolerance).
    pub qr: QrOptions,
}

/// One row of the sequential (type I) ANOVA table: the sum of squares a term adds when it
/// enters after the terms before it.
#[derive(Debug, Clone, PartialEq)]
pub struct AnovaRow {
    /// The term's label.
    pub term: String,
    /// Its degrees of freedom (design columns).
    pub df: usize,
    /// Sequential sum of squares.
    pub ss: f64,
    /// `ss / df`.
    pub ms: f64,
    /// `ms / MSE`; `None` when undefined.
    pub f: Option<f64>,
    /// Upper-tail p-value of `f`; `None` when undefined.
    pub p: Option<f64>,
}

/// The extra-sum-of-squares (partial) F test of one term given all the others.
#[derive(Debug, Clone, PartialEq)]
pub struct PartialF {
    /// The term's label.
    pub term: String,
    /// Its degrees of freedom (design columns).
    pub df: usize,
    /// `SSE(model without the term) − SSE(full model)`.
    pub extra_ss: f64,
    /// `(extra_ss / df) / MSE`; `None` when undefined.
    pub f: Option<f64>,
    /// Upper-tail p-value of `f`; `None` when undefined.
    pub p: Option<f64>,
}

/// A prediction for one new row.
#[derive(Debug, Clone, PartialEq)]
pub struct Prediction {
    /// The predicted mean `x₀ᵀb`.
    pub fit: f64,
    /// Standard error of the predicted mean.
    pub se_mean: f64,
    /// Confidence interval for the mean.
    pub mean_ci: (f64, f64),
    /// Standard error for a new observation (with its weight under WLS).
    pub se_pred: f64,
    /// Prediction interval for a new observation.
    pub pred_int: (f64, f64),
}

/// A fitted least-squares model. Immutable; every result is available through a getter.
#[derive(Debug, Clone)]
pub struct Fit {
    design: Design,
    qr: PivotedQr,
    coefficients: Vec<f64>,
    std_errors: Vec<f64>,
    t_values: Vec<Option<f64>>,
    p_values: Vec<Option<f64>>,
    covariance: Matrix,
    unscaled_cov: Matrix,
    fitted: Vec<f64>,
    residuals: Vec<f64>,
    leverages: Vec<f64>,
    sse: f64,
    ssr: f64,
    ssto: f64,
    df_model: usize,
    df_resid: usize,
    mse: f64,
    r_squared: f64,
    adj_r_squared: f64,
    f_statistic: Option<f64>,
    f_p_value: Option<f64>,
    exact: bool,
    notes: Vec<String>,
    anova: Vec<AnovaRow>,
    partial: Vec<PartialF>,
    log_likelihood: f64,
    refinement_steps: usize,
}

impl Fit {
    /// Fits the design by (weighted) least squares.
    pub fn new(design: &Design, opts: &FitOptions) -> Result<Fit> {
        let n = design.nrows();
        let p = design.ncols();
        let x = design.x();
        let names = design.column_names();
        if n == 0 {
            return Err(EngineError::EmptyInput);
        }
        if p == 0 {
            return Err(EngineError::EmptyModel);
        }
        if n <= p {
            return Err(EngineError::NoResidualDf { rows: n, params: p });
        }
        let first = usize::from(design.has_intercept());
        if design.has_intercept() {
            for (j, name) in names.iter().enumerate().skip(first) {
                let c = x.column(j);
                if c.iter().all(|&v| v == c[0]) {
                    return Err(EngineError::ConstantPredictor { column: name.clone() });
                }
            }
        }
        let y = design.y();
        if design.has_intercept() && y.iter().all(|&v| v == y[0]) {
            return Err(EngineError::ConstantResponse { column: design.response_label() });
        }

        // Weighted problem: rows scaled by √w.
        let w = design.weights();
        let sw: Option<Vec<f64>> = w.map(|w| w.iter().map(|v| v.sqrt()).collect());
        let (xw, yw): (Cow<'_, Matrix>, Vec<f64>) = match &sw {
            None => (Cow::Borrowed(x), y.to_vec()),
            Some(s) => {
                let mut xw = x.clone();
                for j in 0..p {
                    for (v, si) in xw.column_mut(j).iter_mut().zip(s) {
                        *v *= si;
                    }
                }
                (Cow::Owned(xw), y.iter().zip(s).map(|(a, b)| a * b).collect())
            }
        };

        let qr = PivotedQr::factor(&xw, &opts.qr);
        if qr.rank() < p {
            let col = qr.aliased_columns()[0];
            let combination = qr.alias_combination(col).into_iter().map(|(j, _)| names[j].clone()).collect();
            return Err(EngineError::Aliased { column: names[col].clone(), combination });
        }
        let ls = qr.least_squares(&yw);
        let b = ls.coefficients;

        // Raw (unweighted) fitted values and residuals, in compensated arithmetic.
        // The refined residuals are those of the √w-scaled problem; dividing by √wᵢ gives the raw
        // ones to rounding, and fitted values follow as y − e.
        let residuals: Vec<f64> = match &sw {
            None => ls.residuals.clone(),
            Some(s) => ls.residuals.iter().zip(s).map(|(e, si)| e / si).collect(),
        };
        let fitted: Vec<f64> = y.iter().zip(&residuals).map(|(a, e)| a - e).collect();
        let wt = |i: usize| w.map_or(1.0, |w| w[i]);
        // SSE = Σ wᵢeᵢ², the squared length of the √w-scaled residuals.
        let sse = dot_dd(&ls.residuals, &ls.residuals);
        let sum_wy2 = sum_dd(yw.iter().map(|v| v * v));
        let ssto = if design.has_intercept() {
            let sum_w = sum_dd((0..n).map(wt));
            let mean = sum_dd((0..n).map(|i| wt(i) * y[i])) / sum_w;
            sum_dd((0..n).map(|i| wt(i) * (y[i] - mean) * (y[i] - mean)))
        } else {
            sum_wy2
        };
        if ssto == 0.0 {
            return Err(EngineError::ConstantResponse { column: design.response_label() });
        }
        let ssr = (ssto - sse).max(0.0);
        let df_model = p - first;
        let df_resid = n - p;
        let mse = sse / df_resid as f64;
        let exact = sse <= EXACT_FIT_RATIO * sum_wy2;
        let r_squared = (1.0 - sse / ssto).clamp(0.0, 1.0);
        let adj_r_squared = 1.0 - (1.0 - r_squared) * (n - first) as f64 / df_resid as f64;

        let unscaled_cov = qr.unscaled_covariance();
        let covariance = if exact {
            Matrix::zeros(p, p)
        } else {
            let mut c = unscaled_cov.clone();
            for j in 0..p {
                c.column_mut(j).iter_mut().for_each(|v| *v *= mse);
            }
            c
        };
        let std_errors: Vec<f64> = (0..p).map(|j| covariance.get(j, j).max(0.0).sqrt()).collect();
        let df = df_resid as f64;
        let (t_values, p_values): (Vec<Option<f64>>, Vec<Option<f64>>) = b
            .iter()
            .zip(&std_errors)
            .map(|(&bj, &se)| {
                if exact || se <= 0.0 {
                    (None, None)
                } else {
                    let t = bj / se;
                    (Some(t), Some(dist::t_two_sided_p(t, df)))
                }
            })
            .unzip();

        // F tests share one rule: undefined without numerator df; in an exact fit infinite when
        // the numerator is positive and undefined otherwise, with no p-value.
        let f_test = |ss: f64, dfn: usize| -> (Option<f64>, Option<f64>) {
            if dfn == 0 {
                return (None, None);
            }
            if exact {
                return if ss > 0.0 { (Some(f64::INFINITY), None) } else { (None, None) };
            }
            let f = (ss / dfn as f64) / mse;
            (Some(f), Some(dist::f_sf(f, dfn as f64, df)))
        };
        let (f_statistic, f_p_value) = f_test(ssr, df_model);

        // Sequential sums of squares from the effects Qᵀ(√W y): with a full-rank design the
        // pivot order is the design order, so column k adds (Qᵀy)ₖ².
        let effects = qr.qt_mul(&yw);
        let anova = design
            .terms()
            .iter()
            .map(|t| {
                let ss = sum_dd(t.columns.clone().map(|k| effects[k] * effects[k]));
                let dfn = t.columns.len();
                let (f, pv) = f_test(ss, dfn);
                AnovaRow { term: t.label.clone(), df: dfn, ss, ms: ss / dfn.max(1) as f64, f, p: pv }
            })
            .collect();

        // Partial F: extra SS of a term = b_Tᵀ [(XᵀWX)⁻¹]_TT⁻¹ b_T (equal to the drop in SSE when
        // the term's columns are removed).
        let partial = design
            .terms()
            .iter()
            .map(|t| {
                let idx: Vec<usize> = t.columns.clone().collect();
                let extra_ss = wald_quadratic(&unscaled_cov, &b, &idx).max(0.0);
                let (f, pv) = f_test(extra_ss, idx.len());
                PartialF { term: t.label.clone(), df: idx.len(), extra_ss, f, p: pv }
            })
            .collect();

        let sum_ln_w = w.map_or(0.0, |w| sum_dd(w.iter().map(|v| v.ln())));
        let nf = n as f64;
        let log_likelihood = if sse > 0.0 {
            -0.5 * nf * ((2.0 * std::f64::consts::PI).ln() + (sse / nf).ln() + 1.0) + 0.5 * sum_ln_w
        } else {
            f64::INFINITY
        };

        let mut notes = Vec::new();
        if exact {
            notes.push(
                "The model fits the data exactly (the residuals are at rounding level), so the standard errors are 0, \
                 the F statistic is infinite, and t statistics and p-values are undefined."
                    .to_owned(),
            );
        }
        let min_len = qr.min_remaining_length();
        if min_len < NEAR_COLLINEAR_NOTE {
            let worst = qr
                .permutation()
                .iter()
                .take(qr.rank())
                .copied()
                .min_by(|&a, &b| qr.remaining_lengths()[a].total_cmp(&qr.remaining_lengths()[b]))
                .unwrap_or(0);
            notes.push(format!(
                "{} is nearly a linear combination of the columns before it (remaining length {:.1e} on a unit scale); \
                 its estimate is very sensitive to small changes in the data.",
                if names[worst] == INTERCEPT_LABEL { "The intercept" } else { names[worst].as_str() },
                min_len
            ));
        }

        let leverages = qr.leverages();
        Ok(Fit {
            design: design.clone(),
            refinement_steps: ls.refinement_steps,
            qr,
            coefficients: b,
            std_errors,
            t_values,
            p_values,
            covariance,
            unscaled_cov,
            fitted,
            residuals,
            leverages,
            sse,
            ssr,
            ssto,
            df_model,
            df_resid,
            mse,
            r_squared,
            adj_r_squared,
            f_statistic,
            f_p_value,
            exact,
            notes,
            anova,
            partial,
            log_likelihood,
        })
    }

    /// The design that was fitted.
    pub fn design(&self) -> &Design {
        &self.design
    }

    /// The QR factorisation of `√W X` (for diagnostics that reuse it).
    pub fn qr(&self) -> &PivotedQr {
        &self.qr
    }

    /// Estimated coefficients, in design column order.
    pub fn coefficients(&self) -> &[f64] {
        &self.coefficients
    }

    /// Standard errors of the coefficients (0 in an exact fit).
    pub fn std_errors(&self) -> &[f64] {
        &self.std_errors
    }

    /// t statistics; `None` when undefined (exact fit).
    pub fn t_values(&self) -> &[Option<f64>] {
        &self.t_values
    }

    /// Two-sided p-values of the t statistics; `None` when undefined.
    pub fn p_values(&self) -> &[Option<f64>] {
        &self.p_values
    }

    /// Confidence intervals `b ± t_{1−α/2, n−p}·se` at the given level.
    pub fn conf_int(&self, level: f64) -> Result<Vec<(f64, f64)>> {
        let q = self.t_critical(level)?;
        Ok(self.coefficients.iter().zip(&self.std_errors).map(|(&b, &s)| (b - q * s, b + q * s)).collect())
    }

    /// The covariance matrix of the coefficients, `MSE·(XᵀWX)⁻¹` (zero in an exact fit).
    pub fn covariance(&self) -> &Matrix {
        &self.covariance
    }

    /// `(XᵀWX)⁻¹`, the covariance without the factor MSE.
    pub fn unscaled_covariance(&self) -> &Matrix {
        &self.unscaled_cov
    }

    /// Fitted values `Xb` on the scale of the (transformed) response.
    pub fn fitted(&self) -> &[f64] {
        &self.fitted
    }

    /// Raw residuals `y − Xb` (not multiplied by √w).
    pub fn residuals(&self) -> &[f64] {
        &self.residuals
    }

    /// Leverages: the diagonal of the hat matrix of `√W X`.
    pub fn leverages(&self) -> &[f64] {
        &self.leverages
    }

    /// Error sum of squares `Σ wᵢeᵢ²`.
    pub fn sse(&self) -> f64 {
        self.sse
    }

    /// Regression sum of squares `SSTO − SSE`.
    pub fn ssr(&self) -> f64 {
        self.ssr
    }

    /// Total sum of squares, about the weighted mean (intercept) or about zero (no intercept).
    pub fn ssto(&self) -> f64 {
        self.ssto
    }

    /// Which basis [`Fit::ssto`] uses.
    pub fn ss_basis(&self) -> SsBasis {
        if self.design.has_intercept() { SsBasis::AboutMean } else { SsBasis::AboutZero }
    }

    /// Model degrees of freedom (coefficients other than the intercept).
    pub fn df_model(&self) -> usize {
        self.df_model
    }

    /// Residual degrees of freedom `n − p`.
    pub fn df_resid(&self) -> usize {
        self.df_resid
    }

    /// Number of rows used.
    pub fn nobs(&self) -> usize {
        self.design.nrows()
    }

    /// Number of regression coefficients `p`.
    pub fn nparams(&self) -> usize {
        self.coefficients.len()
    }

    /// Mean squared error `SSE / (n − p)`.
    pub fn mse(&self) -> f64 {
        self.mse
    }

    /// Residual standard deviation `√MSE`.
    pub fn sigma(&self) -> f64 {
        self.mse.sqrt()
    }

    /// `R² = 1 − SSE/SSTO` (uncentred without an intercept).
    pub fn r_squared(&self) -> f64 {
        self.r_squared
    }

    /// Adjusted R²: `1 − (1 − R²)(n − k)/(n − p)` with `k` = 1 with an intercept, else 0.
    pub fn adj_r_squared(&self) -> f64 {
        self.adj_r_squared
    }

    /// Global F statistic `(SSR/df_model)/MSE`; infinite for an exact fit; `None` without model
    /// degrees of freedom.
    pub fn f_statistic(&self) -> Option<f64> {
        self.f_statistic
    }

    /// Upper-tail p-value of the global F statistic; `None` when undefined.
    pub fn f_p_value(&self) -> Option<f64> {
        self.f_p_value
    }

    /// Whether the fit is exact (see [`EXACT_FIT_RATIO`]).
    pub fn is_exact_fit(&self) -> bool {
        self.exact
    }

    /// Plain-language notes about the fit.
    pub fn notes(&self) -> &[String] {
        &self.notes
    }

    /// The sequential ANOVA table, one row per term in design order (the residual line is
    /// [`Fit::sse`] on [`Fit::df_resid`] degrees of freedom).
    pub fn sequential_anova(&self) -> &[AnovaRow] {
        &self.anova
    }

    /// The partial F test of each term given all the others.
    pub fn partial_f_tests(&self) -> &[PartialF] {
        &self.partial
    }

    /// Gaussian log-likelihood at the maximum-likelihood σ² (see `docs/METHODS.md`); `+∞` for a
    /// fit with SSE exactly 0.
    pub fn log_likelihood(&self) -> f64 {
        self.log_likelihood
    }

    /// Akaike's information criterion `−2ℓ + 2p` (p = regression coefficients).
    pub fn aic(&self) -> f64 {
        -2.0 * self.log_likelihood + 2.0 * self.nparams() as f64
    }

    /// Schwarz's criterion (SBC/BIC) `−2ℓ + p·ln n`.
    pub fn bic(&self) -> f64 {
        -2.0 * self.log_likelihood + self.nparams() as f64 * (self.nobs() as f64).ln()
    }

    /// Refinement steps the least-squares solve took after the first solve.
    pub fn refinement_steps(&self) -> usize {
        self.refinement_steps
    }

    /// Predictions for new design rows (as built by [`Design::row_for_prediction`]), with the
    /// confidence interval of the mean and the prediction interval of a new observation. Under
    /// WLS, `weights` gives each new row's weight (1 when omitted).
    pub fn predict(&self, rows: &Matrix, weights: Option<&[f64]>, level: f64) -> Result<Vec<Prediction>> {
        let q = self.t_critical(level)?;
        let p = self.nparams();
        if rows.ncols() != p {
            return Err(EngineError::DimensionMismatch {
                what: "number of values in a prediction row".to_owned(),
                expected: p,
                found: rows.ncols(),
            });
        }
        let m = rows.nrows();
        let row_key = |i: usize| format!("{} of the new rows", i + 1);
        if let Some(w) = weights {
            if w.len() != m {
                return Err(EngineError::DimensionMismatch {
                    what: "number of weights for new rows".to_owned(),
                    expected: m,
                    found: w.len(),
                });
            }
            if let Some(i) = w.iter().position(|v| !(v.is_finite() && *v > 0.0)) {
                return Err(EngineError::BadWeight { row_key: row_key(i), value: w[i] });
            }
        }
        let mse = if self.exact { 0.0 } else { self.mse };
        (0..m)
            .map(|i| {
                let x0 = rows.row(i);
                if let Some(j) = x0.iter().position(|v| !v.is_finite()) {
                    return Err(EngineError::NonFinite {
                        column: self.design.column_names()[j].clone(),
                        row_key: row_key(i),
                    });
                }
                let fit = dot_dd(&x0, &self.coefficients);
                let h0 = self.qr.hat_quadratic(&x0);
                let se_mean = (mse * h0).max(0.0).sqrt();
                let w0 = weights.map_or(1.0, |w| w[i]);
                let se_pred = (mse / w0 + se_mean * se_mean).sqrt();
                Ok(Prediction {
                    fit,
                    se_mean,
                    mean_ci: (fit - q * se_mean, fit + q * se_mean),
                    se_pred,
                    pred_int: (fit - q * se_pred, fit + q * se_pred),
                })
            })
            .collect()
    }

    /// `t_{1−α/2, n−p}` for a confidence level `1 − α`.
    fn t_critical(&self, level: f64) -> Result<f64> {
        if !(level > 0.0 && level < 1.0) {
            return Err(EngineError::BadLevel(level));
        }
        Ok(dist::t_isf(0.5 * (1.0 - level), self.df_resid as f64))
    }
}

/// `b_Tᵀ (C_TT)⁻¹ b_T` for the index set `T`, by Cholesky factorisation of the small block.
fn wald_quadratic(c: &Matrix, b: &[f64], idx: &[usize]) -> f64 {
    let k = idx.len();
    if k == 1 {
        let v = c.get(idx[0], idx[0]);
        return if v > 0.0 { b[idx[0]] * b[idx[0]] / v } else { 0.0 };
    }
    // Cholesky L Lᵀ = C_TT.
    let mut l = vec![0.0; k * k];
    for i in 0..k {
        for j in 0..=i {
            let mut s = c.get(idx[i], idx[j]);
            for m in 0..j {
                s -= l[i * k + m] * l[j * k + m];
            }
            if i == j {
                if s <= 0.0 {
                    return 0.0;
                }
                l[i * k + i] = s.sqrt();
            } else {
                l[i * k + j] = s / l[j * k + j];
            }
        }
    }
    // Solve L z = b_T; the quadratic form is zᵀz.
    let mut z = vec![0.0; k];
    for i in 0..k {
        let mut s = b[idx[i]];
        for m in 0..i {
            s -= l[i * k + m] * z[m];
        }
        z[i] = s / l[i * k + i];
    }
    z.iter().map(|v| v * v).sum()
}

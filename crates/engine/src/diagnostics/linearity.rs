//! Linearity: residual plots, added-variable and component-plus-residual data, Ramsey's RESET.
//!
//! Added-variable (partial regression) plot for column j (Mosteller & Tukey 1977; Belsley, Kuh &
//! Welsch 1980, §2.1): the residuals of y on all other columns against the residuals of x_j on all
//! other columns; by the Frisch-Waugh-Lovell theorem its least-squares slope through the origin
//! equals the coefficient b_j. Component-plus-residual plot (Larsen & McCleary 1972; Wood 1973):
//! x_j against b_j·x_j + e. RESET (Ramsey 1969, JRSS B 31, 350–371): the F test of adding ŷ² and
//! ŷ³ to the model, F = ((SSE − SSE_aug)/2) / (SSE_aug/(n − p − 2)).

use super::{CheckOutcome, Named, Verdict, Working, fmt4, least_squares, positive};
use crate::dist;
use crate::matrix::Matrix;

/// One point of a residual plot, named by region key.
#[derive(Debug, Clone, PartialEq)]
pub struct PlotPoint {
    key: String,
    x: f64,
    y: f64,
}

impl PlotPoint {
    /// Region key of the row.
    pub fn key(&self) -> &str {
        &self.key
    }
    /// Horizontal coordinate.
    pub fn x(&self) -> f64 {
        self.x
    }
    /// Vertical coordinate.
    pub fn y(&self) -> f64 {
        self.y
    }
}

fn points(keys: &[String], x: &[f64], y: &[f64]) -> Vec<PlotPoint> {
    keys.iter().zip(x.iter().zip(y)).map(|(k, (&x, &y))| PlotPoint { key: k.clone(), x, y }).collect()
}

/// Residuals against one design column.
#[derive(Debug, Clone, PartialEq)]
pub struct PredictorResiduals {
    name: String,
    points: Vec<PlotPoint>,
}

impl PredictorResiduals {
    /// The design column label.
    pub fn name(&self) -> &str {
        &self.name
    }
    /// Points: x = the column's value, y = residual.
    pub fn points(&self) -> &[PlotPoint] {
        &self.points
    }
}

/// Residual-versus-fitted data: x = fitted value, y = residual (√w-scaled under WLS).
pub(crate) fn residuals_vs_fitted(w: &Working) -> CheckOutcome<Vec<PlotPoint>> {
    if let Some(reason) = w.residual_problem() {
        return CheckOutcome::Unavailable(reason);
    }
    CheckOutcome::Ok(points(&w.keys, &w.fitted, &w.resid))
}

/// Residual-versus-column data for every predictor column (empty for an exact fit).
pub(crate) fn residuals_vs_predictors(w: &Working) -> Vec<PredictorResiduals> {
    if w.residual_problem().is_some() {
        return Vec::new();
    }
    w.predictor_columns()
        .into_iter()
        .map(|j| PredictorResiduals {
            name: w.names[j].clone(),
            points: points(&w.keys, w.x_raw.column(j), &w.resid),
        })
        .collect()
}

/// Added-variable plot data of one design column.
#[derive(Debug, Clone, PartialEq)]
pub struct AddedVariable {
    slope: f64,
    coefficient: f64,
    points: Vec<PlotPoint>,
}

impl AddedVariable {
    /// The least-squares slope through the origin of the plotted points.
    pub fn slope(&self) -> f64 {
        self.slope
    }
    /// The column's coefficient in the model (equal to the slope up to rounding).
    pub fn coefficient(&self) -> f64 {
        self.coefficient
    }
    /// Points: x = column residual on the other columns, y = response residual on them.
    pub fn points(&self) -> &[PlotPoint] {
        &self.points
    }
}

/// Residuals of `v` on the given design (or `v` itself when the design has no columns).
fn residualize(x: &Matrix, v: &[f64]) -> std::result::Result<Vec<f64>, String> {
    if x.ncols() == 0 {
        return Ok(v.to_vec());
    }
    least_squares(x, v).map(|(_, ls)| ls.residuals)
}

/// Added-variable data for every predictor column.
pub(crate) fn added_variables(w: &Working) -> Vec<Named<AddedVariable>> {
    w.predictor_columns()
        .into_iter()
        .map(|j| Named::new(w.names[j].clone(), CheckOutcome::from_result(added_variable(w, j))))
        .collect()
}

fn added_variable(w: &Working, j: usize) -> std::result::Result<AddedVariable, String> {
    let others: Vec<usize> = (0..w.p).filter(|&k| k != j).collect();
    let xo = w.x.select_columns(&others);
    let ey = residualize(&xo, &w.y)?;
    let ex = residualize(&xo, w.x.column(j))?;
    let sxx = super::sum_sq(&ex);
    if !positive(sxx) {
        return Err(format!("{} is fully explained by the other columns", w.names[j]));
    }
    let slope = crate::linalg::dot_dd(&ex, &ey) / sxx;
    Ok(AddedVariable { slope, coefficient: w.coef[j], points: points(&w.keys, &ex, &ey) })
}

/// Component-plus-residual plot data of one design column.
#[derive(Debug, Clone, PartialEq)]
pub struct ComponentResidual {
    coefficient: f64,
    points: Vec<PlotPoint>,
}

impl ComponentResidual {
    /// The column's coefficient.
    pub fn coefficient(&self) -> f64 {
        self.coefficient
    }
    /// Points: x = the column's value, y = coefficient × value + raw residual.
    pub fn points(&self) -> &[PlotPoint] {
        &self.points
    }
}

/// Component-plus-residual data for every predictor column.
pub(crate) fn component_residuals(w: &Working) -> Vec<Named<ComponentResidual>> {
    w.predictor_columns()
        .into_iter()
        .map(|j| {
            let x = w.x_raw.column(j);
            let b = w.coef[j];
            let y: Vec<f64> = x.iter().zip(&w.resid_raw).map(|(xv, e)| b * xv + e).collect();
            Named::new(
                w.names[j].clone(),
                CheckOutcome::Ok(ComponentResidual { coefficient: b, points: points(&w.keys, x, &y) }),
            )
        })
        .collect()
}

/// Ramsey's RESET test with powers 2 and 3 of the fitted values.
#[derive(Debug, Clone, PartialEq)]
pub struct Reset {
    f: f64,
    df_num: usize,
    df_denom: usize,
    p_value: f64,
    verdict: Verdict,
}

impl Reset {
    /// The F statistic.
    pub fn f(&self) -> f64 {
        self.f
    }
    /// Numerator degrees of freedom (2).
    pub fn df_num(&self) -> usize {
        self.df_num
    }
    /// Denominator degrees of freedom `n − p − 2`.
    pub fn df_denom(&self) -> usize {
        self.df_denom
    }
    /// The p-value.
    pub fn p_value(&self) -> f64 {
        self.p_value
    }
    /// The verdict.
    pub fn verdict(&self) -> &Verdict {
        &self.verdict
    }
}

/// RESET on the working model.
pub(crate) fn reset_check(w: &Working, alpha: f64) -> CheckOutcome<Reset> {
    if let Some(reason) = w.residual_problem() {
        return CheckOutcome::Unavailable(reason);
    }
    if w.predictor_columns().is_empty() {
        return CheckOutcome::Unavailable(
            "RESET needs at least one predictor: the fitted values are constant".to_owned(),
        );
    }
    let q = 2;
    if w.n < w.p + q + 1 {
        return CheckOutcome::Unavailable(format!(
            "RESET needs at least {} rows for {} coefficients; there are {}",
            w.p + q + 1,
            w.p,
            w.n
        ));
    }
    // With an intercept the fitted values are standardized before taking powers, which leaves
    // the span of [X, ŷ², ŷ³] and so the F statistic unchanged while keeping the added columns
    // well conditioned (raw powers of large fitted values lose most digits). Without an
    // intercept a standardization would change the test, so they are only divided by their
    // largest magnitude.
    let (centre, scale) = if w.intercept.is_some() {
        let m = super::mean(&w.fitted);
        (m, (super::centered_ss(&w.fitted) / w.n as f64).sqrt())
    } else {
        (0.0, w.fitted.iter().fold(0.0_f64, |m, v| m.max(v.abs())))
    };
    if !positive(scale) {
        return CheckOutcome::Unavailable("the fitted values do not vary".to_owned());
    }
    let mut xa = w.x.clone();
    for power in [2, 3] {
        let col: Vec<f64> = w
            .fitted
            .iter()
            .enumerate()
            .map(|(i, f)| {
                let sw = w.weights.as_ref().map_or(1.0, |wt| wt[i].sqrt());
                sw * ((f - centre) / scale).powi(power)
            })
            .collect();
        xa.push_column(&col);
    }
    let ls = match least_squares(&xa, &w.y) {
        Ok((_, ls)) => ls,
        Err(_) => {
            return CheckOutcome::Unavailable(
                "the squared and cubed fitted values are linearly dependent on the predictors, so RESET is undefined"
                    .to_owned(),
            );
        }
    };
    let sse_aug = super::sum_sq(&ls.residuals);
    let df_denom = w.n - w.p - q;
    let f = if sse_aug > 0.0 {
        ((w.sse - sse_aug).max(0.0) / q as f64) / (sse_aug / df_denom as f64)
    } else {
        f64::INFINITY
    };
    let p = if f.is_finite() { dist::f_sf(f, q as f64, df_denom as f64) } else { 0.0 };
    CheckOutcome::Ok(Reset {
        f,
        df_num: q,
        df_denom,
        p_value: p,
        verdict: Verdict::from_test(
            "Ramsey RESET F test with squared and cubed fitted values",
            f,
            p,
            alpha,
            &format!(
                "No evidence of curvature the straight-line terms miss (F = {}, p = {}).",
                fmt4(f),
                fmt4(p)
            ),
            &format!(
                "The model misses curvature or an interaction (F = {}, p = {}); look at the component-plus-residual plots and the transformation search.",
                fmt4(f),
                fmt4(p)
            ),
        ),
    })
}

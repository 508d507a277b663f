//! Constant variance: the Brown-Forsythe test in its regression form and Koenker's studentized
//! Breusch-Pagan test.
//!
//! Brown-Forsythe (Brown & Forsythe 1974, "Robust tests for the equality of variances", JASA 69,
//! 364–367; regression form as in Kutner et al. 2004, §3.6): the rows are split at the median
//! fitted value — rows whose fitted value is at or below the median form the lower group — the
//! absolute deviations of each group's residuals from that group's median residual are compared
//! by a pooled two-sample t test with n − 2 degrees of freedom. Its t² equals Levene's statistic
//! centred at the median on the two groups.
//!
//! Breusch-Pagan in Koenker's studentized form (Breusch & Pagan 1979, Econometrica 47,
//! 1287–1294; Koenker 1981, "A note on studentizing a test for heteroscedasticity", Journal of
//! Econometrics 17, 107–112): regress the squared residuals on `Z` (with a constant);
//! LM = n·R² with `k − 1` degrees of freedom (χ²), together with the F test of that auxiliary
//! regression.

use super::{CheckOutcome, Verdict, Working, fmt4, least_squares, mean, median, positive};
use crate::dist;
use crate::matrix::Matrix;

/// The Brown-Forsythe test of constant variance.
#[derive(Debug, Clone, PartialEq)]
pub struct BrownForsythe {
    median_fitted: f64,
    lower_n: usize,
    upper_n: usize,
    t: f64,
    df: usize,
    p_value: f64,
    verdict: Verdict,
}

impl BrownForsythe {
    /// The median fitted value used to split the rows.
    pub fn median_fitted(&self) -> f64 {
        self.median_fitted
    }
    /// Rows in the lower group (fitted value at or below the median).
    pub fn lower_n(&self) -> usize {
        self.lower_n
    }
    /// Rows in the upper group.
    pub fn upper_n(&self) -> usize {
        self.upper_n
    }
    /// The pooled two-sample t statistic (lower-group mean deviation minus upper).
    pub fn t(&self) -> f64 {
        self.t
    }
    /// `t²`, equal to Levene's statistic centred at the median on the two groups.
    pub fn t_squared(&self) -> f64 {
        self.t * self.t
    }
    /// Degrees of freedom `n − 2`.
    pub fn df(&self) -> usize {
        self.df
    }
    /// Two-sided p-value.
    pub fn p_value(&self) -> f64 {
        self.p_value
    }
    /// The verdict.
    pub fn verdict(&self) -> &Verdict {
        &self.verdict
    }
}

/// The Brown-Forsythe test of `residuals` split at the median of `fitted` (see the module notes).
pub fn brown_forsythe(residuals: &[f64], fitted: &[f64], alpha: f64) -> CheckOutcome<BrownForsythe> {
    let n = residuals.len();
    if n != fitted.len() {
        return CheckOutcome::Unavailable("residuals and fitted values differ in length".to_owned());
    }
    if n < 3 {
        return CheckOutcome::Unavailable(format!(
            "the Brown-Forsythe test needs at least 3 rows; there are {n}"
        ));
    }
    let med = median(fitted);
    let (mut lower, mut upper) = (Vec::new(), Vec::new());
    for (&e, &f) in residuals.iter().zip(fitted) {
        if f <= med { lower.push(e) } else { upper.push(e) }
    }
    if upper.is_empty() {
        return CheckOutcome::Unavailable(
            "all fitted values are equal, so the rows cannot be split into two groups".to_owned(),
        );
    }
    let dev = |g: &[f64]| -> Vec<f64> {
        let m = median(g);
        g.iter().map(|e| (e - m).abs()).collect()
    };
    let (d1, d2) = (dev(&lower), dev(&upper));
    let (m1, m2) = (mean(&d1), mean(&d2));
    let ss: f64 = d1.iter().map(|d| (d - m1) * (d - m1)).sum::<f64>()
        + d2.iter().map(|d| (d - m2) * (d - m2)).sum::<f64>();
    let df = n - 2;
    let sp2 = ss / df as f64;
    let (n1, n2) = (d1.len() as f64, d2.len() as f64);
    let se = (sp2 * (1.0 / n1 + 1.0 / n2)).sqrt();
    if !positive(se) || !se.is_finite() {
        return CheckOutcome::Unavailable(
            "the absolute deviations do not vary within the groups, so the test is undefined".to_owned(),
        );
    }
    let t = (m1 - m2) / se;
    let p = dist::t_two_sided_p(t, df as f64);
    let direction = if m2 > m1 { "larger" } else { "smaller" };
    CheckOutcome::Ok(BrownForsythe {
        median_fitted: med,
        lower_n: d1.len(),
        upper_n: d2.len(),
        t,
        df,
        p_value: p,
        verdict: Verdict::from_test(
            "Brown-Forsythe t test, split at the median fitted value",
            t,
            p,
            alpha,
            &format!(
                "No evidence against constant variance between low and high fitted values (t = {}, p = {}).",
                fmt4(t),
                fmt4(p)
            ),
            &format!(
                "Residual spread is {direction} where fitted values are high (t = {}, p = {}); standard errors may be off, so compare the robust (HC3) ones.",
                fmt4(t),
                fmt4(p)
            ),
        ),
    })
}

/// The Brown-Forsythe test of the working residuals.
pub(crate) fn brown_forsythe_check(w: &Working, alpha: f64) -> CheckOutcome<BrownForsythe> {
    if let Some(reason) = w.residual_problem() {
        return CheckOutcome::Unavailable(reason);
    }
    brown_forsythe(&w.resid, &w.fitted, alpha)
}

/// Koenker's studentized Breusch-Pagan test.
#[derive(Debug, Clone, PartialEq)]
pub struct BreuschPagan {
    against: String,
    lm: f64,
    lm_df: usize,
    lm_p_value: f64,
    f: f64,
    f_df: (usize, usize),
    f_p_value: f64,
    verdict: Verdict,
}

impl BreuschPagan {
    /// What the squared residuals were regressed on, in words.
    pub fn against(&self) -> &str {
        &self.against
    }
    /// The LM statistic `n·R²`.
    pub fn lm(&self) -> f64 {
        self.lm
    }
    /// Its χ² degrees of freedom.
    pub fn lm_df(&self) -> usize {
        self.lm_df
    }
    /// Its p-value.
    pub fn lm_p_value(&self) -> f64 {
        self.lm_p_value
    }
    /// The F statistic of the auxiliary regression.
    pub fn f(&self) -> f64 {
        self.f
    }
    /// Its degrees of freedom.
    pub fn f_df(&self) -> (usize, usize) {
        self.f_df
    }
    /// Its p-value.
    pub fn f_p_value(&self) -> f64 {
        self.f_p_value
    }
    /// The verdict (on the LM statistic).
    pub fn verdict(&self) -> &Verdict {
        &self.verdict
    }
}

/// Koenker's Breusch-Pagan test of `residuals` against the columns of `z`, which must include a
/// constant column.
pub fn breusch_pagan(residuals: &[f64], z: &Matrix, against: &str, alpha: f64) -> CheckOutcome<BreuschPagan> {
    let n = residuals.len();
    let k = z.ncols();
    if z.nrows() != n {
        return CheckOutcome::Unavailable("residuals and design differ in length".to_owned());
    }
    if k < 2 {
        return CheckOutcome::Unavailable("there is nothing to regress the squared residuals on".to_owned());
    }
    if n <= k {
        return CheckOutcome::Unavailable(format!(
            "the Breusch-Pagan test needs more rows ({n}) than auxiliary coefficients ({k})"
        ));
    }
    let u: Vec<f64> = residuals.iter().map(|e| e * e).collect();
    let sst = super::centered_ss(&u);
    if !positive(sst) {
        return CheckOutcome::Unavailable(
            "the squared residuals do not vary, so the test is undefined".to_owned(),
        );
    }
    let (_, ls) = match least_squares(z, &u) {
        Ok(v) => v,
        Err(e) => return CheckOutcome::Unavailable(e),
    };
    let sse = super::sum_sq(&ls.residuals);
    let r2 = (1.0 - sse / sst).clamp(0.0, 1.0);
    let lm = n as f64 * r2;
    let df1 = k - 1;
    let df2 = n - k;
    let lm_p = dist::chi2_sf(lm, df1 as f64);
    let f = if sse > 0.0 { ((sst - sse) / df1 as f64) / (sse / df2 as f64) } else { f64::INFINITY };
    let f_p = if f.is_finite() { dist::f_sf(f, df1 as f64, df2 as f64) } else { 0.0 };
    CheckOutcome::Ok(BreuschPagan {
        against: against.to_owned(),
        lm,
        lm_df: df1,
        lm_p_value: lm_p,
        f,
        f_df: (df1, df2),
        f_p_value: f_p,
        verdict: Verdict::from_test(
            format!("Breusch-Pagan LM, Koenker's studentized form, against {against}"),
            lm,
            lm_p,
            alpha,
            &format!(
                "No evidence that the residual variance changes with {against} (LM = {}, p = {}).",
                fmt4(lm),
                fmt4(lm_p)
            ),
            &format!(
                "The residual variance changes with {against} (LM = {}, p = {}); classical standard errors may mislead, so read the robust (HC3) ones.",
                fmt4(lm),
                fmt4(lm_p)
            ),
        ),
    })
}

/// Breusch-Pagan against the design's predictor columns (a constant is added when the model has
/// no intercept).
pub(crate) fn breusch_pagan_predictors(w: &Working, alpha: f64) -> CheckOutcome<BreuschPagan> {
    if let Some(reason) = w.residual_problem() {
        return CheckOutcome::Unavailable(reason);
    }
    let cols = w.predictor_columns();
    if cols.is_empty() {
        return CheckOutcome::Unavailable("the model has no predictors to test against".to_owned());
    }
    let mut z = Matrix::zeros(0, 0);
    z.push_column(&vec![1.0; w.n]);
    for &j in &cols {
        z.push_column(w.x_raw.column(j));
    }
    breusch_pagan(&w.resid, &z, "the predictors", alpha)
}

/// Breusch-Pagan against the fitted values.
pub(crate) fn breusch_pagan_fitted(w: &Working, alpha: f64) -> CheckOutcome<BreuschPagan> {
    if let Some(reason) = w.residual_problem() {
        return CheckOutcome::Unavailable(reason);
    }
    let z = Matrix::from_columns(&[vec![1.0; w.n], w.fitted.clone()]);
    breusch_pagan(&w.resid, &z, "the fitted values", alpha)
}

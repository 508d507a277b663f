//! Collinearity: correlations of the predictors, variance inflation factors, and condition
//! indices with variance-decomposition proportions.
//!
//! - VIFⱼ = 1/(1 − Rⱼ²), with Rⱼ² from regressing column j on all other design columns including
//!   the constant (Marquardt 1970, Technometrics 12, 591–612; Kutner et al. 2004, §10.5, where a
//!   largest VIF above 10 signals serious collinearity). Without an intercept Rⱼ² is uncentred.
//! - Condition indices and variance-decomposition proportions (Belsley, Kuh & Welsch 1980,
//!   *Regression Diagnostics*, §3.2–3.3): the design columns, the constant included and not
//!   centred, are scaled to unit length; with the singular value decomposition X = U·D·Vᵀ the
//!   condition indices are ηₖ = d_max/dₖ and the proportion of var(bⱼ) tied to component k is
//!   πₖⱼ = (vⱼₖ²/dₖ²) / Σₖ (vⱼₖ²/dₖ²). Belsley, Kuh & Welsch read an index of 30 or more with two or
//!   more proportions above 0.5 as a damaging near-dependency. The SVD is computed by one-sided
//!   Jacobi rotations (Hestenes 1958; Demmel & Veselić 1992), which give small singular values to
//!   high relative accuracy.

use super::{CheckOutcome, Verdict, VerdictLevel, Working, fmt4, least_squares, positive};
use crate::matrix::Matrix;

/// Pearson correlations of the predictor columns.
#[derive(Debug, Clone, PartialEq)]
pub struct Correlation {
    names: Vec<String>,
    matrix: Vec<Vec<f64>>,
}

impl Correlation {
    /// Column labels (rows and columns of the matrix).
    pub fn names(&self) -> &[String] {
        &self.names
    }
    /// The correlation matrix, row by row.
    pub fn matrix(&self) -> &[Vec<f64>] {
        &self.matrix
    }
}

/// Pearson correlations of the given columns.
pub fn pearson_correlation(names: &[String], columns: &[&[f64]]) -> CheckOutcome<Correlation> {
    let k = columns.len();
    if k == 0 {
        return CheckOutcome::Unavailable("the model has no predictor columns".to_owned());
    }
    let centred: Vec<Vec<f64>> = columns
        .iter()
        .map(|c| {
            let m = super::mean(c);
            c.iter().map(|v| v - m).collect()
        })
        .collect();
    let norms: Vec<f64> = centred.iter().map(|c| super::sum_sq(c).sqrt()).collect();
    if let Some(j) = norms.iter().position(|&s| !positive(s)) {
        return CheckOutcome::Unavailable(format!(
            "{} does not vary, so its correlations are undefined",
            names[j]
        ));
    }
    let mut matrix = vec![vec![1.0; k]; k];
    for a in 0..k {
        for b in a + 1..k {
            let r =
                (crate::linalg::dot_dd(&centred[a], &centred[b]) / (norms[a] * norms[b])).clamp(-1.0, 1.0);
            matrix[a][b] = r;
            matrix[b][a] = r;
        }
    }
    CheckOutcome::Ok(Correlation { names: names.to_vec(), matrix })
}

/// Correlations of the working model's predictor columns.
pub(crate) fn correlation(w: &Working) -> CheckOutcome<Correlation> {
    let cols = w.predictor_columns();
    let names: Vec<String> = cols.iter().map(|&j| w.names[j].clone()).collect();
    let data: Vec<&[f64]> = cols.iter().map(|&j| w.x_raw.column(j)).collect();
    pearson_correlation(&names, &data)
}

/// The variance inflation factor of one predictor column.
#[derive(Debug, Clone, PartialEq)]
pub struct Vif {
    name: String,
    vif: f64,
    r_squared: f64,
}

impl Vif {
    /// Column label.
    pub fn name(&self) -> &str {
        &self.name
    }
    /// The VIF (infinite when the column is an exact combination of the others).
    pub fn vif(&self) -> f64 {
        self.vif
    }
    /// R² of the column on the other columns.
    pub fn r_squared(&self) -> f64 {
        self.r_squared
    }
}

/// Variance inflation factors of the columns `cols` of design `x` (whose column `intercept`, if
/// any, is the constant).
pub fn variance_inflation(x: &Matrix, names: &[String], intercept: Option<usize>) -> CheckOutcome<Vec<Vif>> {
    let cols: Vec<usize> = (0..x.ncols()).filter(|&j| Some(j) != intercept).collect();
    if cols.is_empty() {
        return CheckOutcome::Unavailable("the model has no predictor columns".to_owned());
    }
    let mut out = Vec::with_capacity(cols.len());
    for &j in &cols {
        let others: Vec<usize> = (0..x.ncols()).filter(|&k| k != j).collect();
        let xj = x.column(j);
        let total = if intercept.is_some() { super::centered_ss(xj) } else { super::sum_sq(xj) };
        if !positive(total) {
            return CheckOutcome::Unavailable(format!("{} does not vary, so its VIF is undefined", names[j]));
        }
        let r2 = if others.is_empty() {
            0.0
        } else {
            match least_squares(&x.select_columns(&others), xj) {
                Ok((_, ls)) => (1.0 - super::sum_sq(&ls.residuals) / total).clamp(0.0, 1.0),
                Err(e) => return CheckOutcome::Unavailable(e),
            }
        };
        let vif = if r2 < 1.0 { 1.0 / (1.0 - r2) } else { f64::INFINITY };
        out.push(Vif { name: names[j].clone(), vif, r_squared: r2 });
    }
    CheckOutcome::Ok(out)
}

/// VIFs of the working model (on the unweighted design).
pub(crate) fn vifs(w: &Working) -> CheckOutcome<Vec<Vif>> {
    variance_inflation(&w.x_raw, &w.names, w.intercept)
}

/// The verdict on a set of VIFs: above 10 a problem (Kutner et al. 2004, §10.5), above 5 worth
/// watching (common practice, no published source).
pub(crate) fn vif_verdict(v: &[Vif]) -> Verdict {
    let worst = v.iter().max_by(|a, b| a.vif.total_cmp(&b.vif));
    let (name, max) = worst.map_or(("", 1.0), |w| (w.name.as_str(), w.vif));
    let threshold = "largest VIF above 10 is a problem (Kutner et al. 2004); above 5 is worth watching (common practice, no published source)";
    let test = "Variance inflation factors";
    if max > 10.0 {
        Verdict::new(
            VerdictLevel::Problem,
            test,
            max,
            None,
            threshold,
            format!(
                "{name} is largely explained by the other predictors (VIF {}); its coefficient is unstable and should not be read on its own.",
                fmt4(max)
            ),
        )
    } else if max > 5.0 {
        Verdict::new(
            VerdictLevel::Watch,
            test,
            max,
            None,
            threshold,
            format!(
                "{name} overlaps noticeably with the other predictors (VIF {}); its standard error is inflated.",
                fmt4(max)
            ),
        )
    } else {
        Verdict::new(
            VerdictLevel::Clear,
            test,
            max,
            None,
            threshold,
            format!(
                "The predictors overlap little (largest VIF {}); each coefficient can be read separately.",
                fmt4(max)
            ),
        )
    }
}

/// Condition indices with variance-decomposition proportions.
#[derive(Debug, Clone, PartialEq)]
pub struct ConditionDiagnostics {
    names: Vec<String>,
    singular_values: Vec<f64>,
    indices: Vec<f64>,
    proportions: Vec<Vec<f64>>,
    verdict: Verdict,
}

impl ConditionDiagnostics {
    /// Design column labels, the intercept included (the columns of the proportions).
    pub fn names(&self) -> &[String] {
        &self.names
    }
    /// Singular values of the unit-length-scaled design, largest first.
    pub fn singular_values(&self) -> &[f64] {
        &self.singular_values
    }
    /// Condition indices, one per component, smallest (1) first.
    pub fn indices(&self) -> &[f64] {
        &self.indices
    }
    /// `proportions()[k][j]`: the share of var(bⱼ) tied to component k; each column sums to 1.
    pub fn proportions(&self) -> &[Vec<f64>] {
        &self.proportions
    }
    /// The verdict.
    pub fn verdict(&self) -> &Verdict {
        &self.verdict
    }
}

/// Singular values and right singular vectors of `a` (n × p, n ≥ p) by one-sided Jacobi
/// rotations; returns `(d, V)` with `V` as columns, unsorted.
fn jacobi_svd(a: &Matrix) -> (Vec<f64>, Matrix) {
    let p = a.ncols();
    let mut u = a.clone();
    let mut v = Matrix::identity(p);
    for _sweep in 0..60 {
        let mut rotated = false;
        for j in 0..p {
            for k in j + 1..p {
                let alpha = super::sum_sq(u.column(j));
                let beta = super::sum_sq(u.column(k));
                let gamma = crate::linalg::dot_dd(u.column(j), u.column(k));
                if gamma == 0.0 || gamma.abs() <= f64::EPSILON * (alpha * beta).sqrt() {
                    continue;
                }
                rotated = true;
                let zeta = (beta - alpha) / (2.0 * gamma);
                let t = zeta.signum() / (zeta.abs() + (1.0 + zeta * zeta).sqrt());
                let c = 1.0 / (1.0 + t * t).sqrt();
                let s = c * t;
                rotate(&mut u, j, k, c, s);
                rotate(&mut v, j, k, c, s);
            }
        }
        if !rotated {
            break;
        }
    }
    let d = (0..p).map(|j| super::sum_sq(u.column(j)).sqrt()).collect();
    (d, v)
}

/// Applies the plane rotation `[c s; −s c]` to columns `j` and `k` of `m`.
fn rotate(m: &mut Matrix, j: usize, k: usize, c: f64, s: f64) {
    for i in 0..m.nrows() {
        let (x, y) = (m.get(i, j), m.get(i, k));
        m.set(i, j, c * x - s * y);
        m.set(i, k, s * x + c * y);
    }
}

/// Belsley-Kuh-Welsch condition diagnostics of a design (see the module notes).
pub fn condition_diagnostics(x: &Matrix, names: &[String]) -> CheckOutcome<ConditionDiagnostics> {
    let (n, p) = (x.nrows(), x.ncols());
    if p == 0 {
        return CheckOutcome::Unavailable("the design has no columns".to_owned());
    }
    if n < p {
        return CheckOutcome::Unavailable(format!("{n} rows are fewer than the {p} design columns"));
    }
    let mut scaled = x.clone();
    for (j, name) in names.iter().enumerate().take(p) {
        let len = super::sum_sq(x.column(j)).sqrt();
        if !positive(len) {
            return CheckOutcome::Unavailable(format!("{name} is zero in every row"));
        }
        scaled.column_mut(j).iter_mut().for_each(|v| *v /= len);
    }
    let (d, v) = jacobi_svd(&scaled);
    let mut order: Vec<usize> = (0..p).collect();
    order.sort_by(|&a, &b| d[b].total_cmp(&d[a]));
    let dmax = d[order[0]];
    let dmin = d[order[p - 1]];
    if !positive(dmin) {
        return CheckOutcome::Unavailable("the design columns are linearly dependent".to_owned());
    }
    let singular_values: Vec<f64> = order.iter().map(|&k| d[k]).collect();
    let indices: Vec<f64> = singular_values.iter().map(|s| dmax / s).collect();
    // phi[k][j] = v_jk² / d_k², in sorted component order.
    let phi: Vec<Vec<f64>> =
        order.iter().map(|&k| (0..p).map(|j| v.get(j, k) * v.get(j, k) / (d[k] * d[k])).collect()).collect();
    let totals: Vec<f64> = (0..p).map(|j| phi.iter().map(|row| row[j]).sum()).collect();
    let proportions: Vec<Vec<f64>> =
        phi.iter().map(|row| row.iter().zip(&totals).map(|(a, t)| a / t).collect()).collect();
    let verdict = condition_verdict(names, &indices, &proportions);
    CheckOutcome::Ok(ConditionDiagnostics {
        names: names.to_vec(),
        singular_values,
        indices,
        proportions,
        verdict,
    })
}

fn condition_verdict(names: &[String], indices: &[f64], proportions: &[Vec<f64>]) -> Verdict {
    let max = indices.last().copied().unwrap_or(1.0);
    let threshold = "condition index of 30 or more with two or more variance proportions above 0.5 (Belsley, Kuh & Welsch 1980); 10 to 30 worth watching";
    let test = "Condition indices with variance-decomposition proportions, unit-length columns";
    // The component with the largest index that ties up at least two coefficients.
    let involved = |k: usize| -> Vec<String> {
        proportions[k].iter().zip(names).filter(|(p, _)| **p > 0.5).map(|(_, n)| n.clone()).collect()
    };
    for k in (0..indices.len()).rev() {
        let inv = involved(k);
        if indices[k] >= 30.0 && inv.len() >= 2 {
            return Verdict::new(
                VerdictLevel::Problem,
                test,
                indices[k],
                None,
                threshold,
                format!(
                    "A near-dependency (condition index {}) ties together {}; their separate coefficients are poorly determined.",
                    fmt4(indices[k]),
                    crate::error::join_names(&inv)
                ),
            );
        }
    }
    if max >= 10.0 {
        return Verdict::new(
            VerdictLevel::Watch,
            test,
            max,
            None,
            threshold,
            format!("The design has a moderate near-dependency (largest condition index {}).", fmt4(max)),
        );
    }
    Verdict::new(
        VerdictLevel::Clear,
        test,
        max,
        None,
        threshold,
        format!("No near-dependency among the design columns (largest condition index {}).", fmt4(max)),
    )
}

/// Condition diagnostics of the working model's unweighted design.
pub(crate) fn condition_check(w: &Working) -> CheckOutcome<ConditionDiagnostics> {
    condition_diagnostics(&w.x_raw, &w.names)
}

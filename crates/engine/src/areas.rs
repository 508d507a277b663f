//! Area-level numerics for describing a table and reading a fit area by area: column
//! summaries (quartiles by Hyndman & Fan 1996, definition 7), Pearson correlations on
//! pairwise-complete rows, and the leave-one-out prediction interval of every area.
//!
//! The leave-one-out interval of area `i` is the prediction interval a model fitted without
//! that area gives for it, computed from the full fit by the deletion identities (Belsley, Kuh
//! & Welsch 1980, §2.1; Cook & Weisberg 1982, §2.2):
//!
//! - centre `ŷ₍ᵢ₎ = yᵢ − eᵢ/(1 − hᵢ)`;
//! - `s₍ᵢ₎² = (SSE − wᵢeᵢ²/(1 − hᵢ))/(n − p − 1)`;
//! - half-width `t(1 − α/2, n − p − 1) · s₍ᵢ₎ / √(wᵢ(1 − hᵢ))` (with `wᵢ = 1` when unweighted),
//!
//! so `yᵢ` lies outside it exactly when `|tᵢ| > t(1 − α/2, n − p − 1)`, with
//! `tᵢ = √wᵢ·eᵢ/(s₍ᵢ₎√(1 − hᵢ))` the studentized deleted residual.

use crate::dist;
use crate::error::{EngineError, Result};
use crate::fit::Fit;

/// Leverages this close to 1 leave a row's deleted quantities undefined.
const HAT_ONE_TOL: f64 = 1e-10;

/// The summary of one numeric column.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Summary {
    /// Finite values counted.
    pub n: usize,
    /// Cells that are missing or not finite.
    pub missing: usize,
    /// The mean, when `n ≥ 1`.
    pub mean: Option<f64>,
    /// The sample standard deviation (divisor `n − 1`), when `n ≥ 2`.
    pub sd: Option<f64>,
    /// The five quartile points (minimum, lower quartile, median, upper quartile, maximum),
    /// when `n ≥ 1`.
    pub quartiles: Option<[f64; 5]>,
}

/// Summarises a numeric column: count, missing, mean, standard deviation and quartiles.
pub fn summarise(values: &[Option<f64>]) -> Summary {
    let mut xs: Vec<f64> = values.iter().flatten().copied().filter(|x| x.is_finite()).collect();
    let n = xs.len();
    let missing = values.len() - n;
    if n == 0 {
        return Summary { n, missing, mean: None, sd: None, quartiles: None };
    }
    let mean = xs.iter().sum::<f64>() / n as f64;
    let sd = (n >= 2).then(|| (xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64).sqrt());
    xs.sort_by(f64::total_cmp);
    let q = |p: f64| quantile_sorted(&xs, p);
    Summary {
        n,
        missing,
        mean: Some(mean),
        sd,
        quartiles: Some([xs[0], q(0.25), q(0.5), q(0.75), xs[n - 1]]),
    }
}

/// The `p` quantile of sorted, non-empty values by linear interpolation between order
/// statistics (Hyndman & Fan 1996, definition 7).
fn quantile_sorted(sorted: &[f64], p: f64) -> f64 {
    let h = (sorted.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Pearson correlations between columns, each pair on the rows where both are present.
#[derive(Debug, Clone, PartialEq)]
pub struct PairwiseCorrelation {
    /// `r[i][j]`: the correlation of columns `i` and `j`; `None` when fewer than three rows are
    /// shared or a column has no spread on the shared rows.
    pub r: Vec<Vec<Option<f64>>>,
    /// `rows[i][j]`: how many rows both columns have (the diagonal counts each column's own).
    pub rows: Vec<Vec<usize>>,
}

/// Pearson correlations on pairwise-complete rows (a row counts for a pair when both cells are
/// present and finite). Columns must have equal lengths.
pub fn pairwise_pearson(columns: &[&[Option<f64>]]) -> Result<PairwiseCorrelation> {
    let k = columns.len();
    let len = columns.first().map_or(0, |c| c.len());
    if let Some(c) = columns.iter().find(|c| c.len() != len) {
        return Err(EngineError::DimensionMismatch {
            what: "number of values in a correlated column".to_owned(),
            expected: len,
            found: c.len(),
        });
    }
    let value = |c: &[Option<f64>], i: usize| c[i].filter(|x| x.is_finite());
    let mut r = vec![vec![None; k]; k];
    let mut rows = vec![vec![0usize; k]; k];
    for a in 0..k {
        for b in a..k {
            let pairs: Vec<(f64, f64)> =
                (0..len).filter_map(|i| Some((value(columns[a], i)?, value(columns[b], i)?))).collect();
            let m = pairs.len();
            rows[a][b] = m;
            rows[b][a] = m;
            let rab = if m >= 3 { pearson(&pairs) } else { None };
            let rab = if a == b { rab.map(|_| 1.0) } else { rab };
            r[a][b] = rab;
            r[b][a] = rab;
        }
    }
    Ok(PairwiseCorrelation { r, rows })
}

/// Pearson's r of paired values, by two passes about the means; `None` without spread.
fn pearson(pairs: &[(f64, f64)]) -> Option<f64> {
    let n = pairs.len() as f64;
    let (mx, my) = pairs.iter().fold((0.0, 0.0), |(a, b), (x, y)| (a + x, b + y));
    let (mx, my) = (mx / n, my / n);
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (x, y) in pairs {
        sxy += (x - mx) * (y - my);
        sxx += (x - mx) * (x - mx);
        syy += (y - my) * (y - my);
    }
    if sxx > 0.0 && syy > 0.0 { Some((sxy / (sxx.sqrt() * syy.sqrt())).clamp(-1.0, 1.0)) } else { None }
}

/// One area read against a model fitted without it.
#[derive(Debug, Clone, PartialEq)]
pub struct DeletedRow {
    /// The area's key.
    pub key: String,
    /// The observed response `yᵢ` (on the model's scale).
    pub observed: f64,
    /// The fitted value `ŷᵢ` of the full model.
    pub predicted: f64,
    /// The raw residual `eᵢ = yᵢ − ŷᵢ`.
    pub residual: f64,
    /// The leverage `hᵢ`.
    pub leverage: f64,
    /// The case weight `wᵢ` (1 when unweighted).
    pub weight: f64,
    /// The studentized deleted residual `tᵢ`; `None` when undefined.
    pub studentized_deleted: Option<f64>,
    /// The residual standard deviation without this area, `s₍ᵢ₎`; `None` when undefined.
    pub deleted_sd: Option<f64>,
    /// The leave-one-out prediction `ŷ₍ᵢ₎`; `None` when the leverage is 1.
    pub deleted_prediction: Option<f64>,
    /// The interval's half-width; `None` when undefined.
    pub half_width: Option<f64>,
}

impl DeletedRow {
    /// The interval's lower end.
    pub fn low(&self) -> Option<f64> {
        Some(self.deleted_prediction? - self.half_width?)
    }

    /// The interval's upper end.
    pub fn high(&self) -> Option<f64> {
        Some(self.deleted_prediction? + self.half_width?)
    }
}

/// Every area's leave-one-out prediction interval and its flag threshold.
#[derive(Debug, Clone, PartialEq)]
pub struct DeletedIntervals {
    /// The interval level, e.g. 0.95.
    pub level: f64,
    /// The degrees of freedom of each leave-one-out fit, `n − p − 1`.
    pub df: usize,
    /// `t(1 − α/2, n − p − 1)`; `None` when `n − p − 1 < 1`.
    pub t_critical: Option<f64>,
    /// Whether the fit has case weights.
    pub weighted: bool,
    /// One row per area, in the fit's row order.
    pub rows: Vec<DeletedRow>,
}

impl DeletedIntervals {
    /// Whether area `i`'s observed value lies outside its interval, i.e. `|tᵢ| > t_critical`;
    /// `None` when either is undefined.
    pub fn outside(&self, i: usize) -> Option<bool> {
        let t = self.rows.get(i)?.studentized_deleted?;
        Some(t.abs() > self.t_critical?)
    }
}

/// The leave-one-out prediction interval of every area of `fit` at `level` (see the module
/// notes for the formulas).
pub fn deleted_intervals(fit: &Fit, level: f64) -> Result<DeletedIntervals> {
    if !(level > 0.0 && level < 1.0) {
        return Err(EngineError::BadLevel(level));
    }
    let design = fit.design();
    let n = fit.nobs();
    let p = fit.nparams();
    let df = n.saturating_sub(p + 1);
    let t_critical = (df >= 1).then(|| dist::t_isf(0.5 * (1.0 - level), df as f64));
    let sse = fit.sse();
    let rows = (0..n)
        .map(|i| {
            let y = design.y()[i];
            let e = fit.residuals()[i];
            let h = fit.leverages()[i];
            let w = design.weights().map_or(1.0, |w| w[i]);
            let omh = 1.0 - h;
            let usable = omh > HAT_ONE_TOL;
            let deleted_sd = if usable && df >= 1 {
                let s2 = (sse - w * e * e / omh) / df as f64;
                (s2 > 0.0).then(|| s2.sqrt())
            } else {
                None
            };
            let studentized_deleted = deleted_sd.map(|s| w.sqrt() * e / (s * omh.sqrt()));
            let deleted_prediction = usable.then(|| y - e / omh);
            let half_width = match (deleted_sd, t_critical) {
                (Some(s), Some(q)) => Some(q * s / (w * omh).sqrt()),
                _ => None,
            };
            DeletedRow {
                key: design.keys()[i].clone(),
                observed: y,
                predicted: fit.fitted()[i],
                residual: e,
                leverage: h,
                weight: w,
                studentized_deleted,
                deleted_sd,
                deleted_prediction,
                half_width,
            }
        })
        .collect();
    Ok(DeletedIntervals { level, df, t_critical, weighted: design.weights().is_some(), rows })
}

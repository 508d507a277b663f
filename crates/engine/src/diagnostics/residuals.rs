//! Residuals: raw, internally studentized (standardized) and studentized deleted, with hat values.
//!
//! With `e` the residuals (√w-scaled under WLS), `hᵢ` the leverages, `s² = SSE/(n − p)` and
//! `s₍ᵢ₎² = (SSE − eᵢ²/(1 − hᵢ))/(n − p − 1)` the residual variance without row `i`:
//! standardized `rᵢ = eᵢ / (s·√(1 − hᵢ))`, studentized deleted `tᵢ = eᵢ / (s₍ᵢ₎·√(1 − hᵢ))`
//! (Belsley, Kuh & Welsch 1980, §2.1; Cook & Weisberg 1982, §2.2).

use super::{CheckOutcome, Working};

/// Leverages this close to 1 make a row's studentized residuals undefined.
pub(crate) const HAT_ONE_TOL: f64 = 1e-10;

/// Residuals of every row, named by region key.
#[derive(Debug, Clone, PartialEq)]
pub struct ResidualTable {
    keys: Vec<String>,
    raw: Vec<f64>,
    scaled: Vec<f64>,
    fitted: Vec<f64>,
    hat: Vec<f64>,
    internal: Vec<Option<f64>>,
    external: Vec<Option<f64>>,
}

impl ResidualTable {
    /// Region keys, in row order.
    pub fn keys(&self) -> &[String] {
        &self.keys
    }
    /// Raw residuals `y − ŷ` on the response scale.
    pub fn raw(&self) -> &[f64] {
        &self.raw
    }
    /// Residuals used by the checks: `√wᵢ·eᵢ` under WLS, equal to [`ResidualTable::raw`] otherwise.
    pub fn scaled(&self) -> &[f64] {
        &self.scaled
    }
    /// Fitted values.
    pub fn fitted(&self) -> &[f64] {
        &self.fitted
    }
    /// Hat values (leverages).
    pub fn hat(&self) -> &[f64] {
        &self.hat
    }
    /// Internally studentized (standardized) residuals; `None` where the leverage is 1.
    pub fn internal(&self) -> &[Option<f64>] {
        &self.internal
    }
    /// Studentized deleted (externally studentized) residuals; `None` where undefined.
    pub fn external(&self) -> &[Option<f64>] {
        &self.external
    }
}

/// The residual table of the working model.
pub(crate) fn residual_table(w: &Working) -> CheckOutcome<ResidualTable> {
    if let Some(reason) = w.residual_problem() {
        return CheckOutcome::Unavailable(reason);
    }
    let (internal, external) = studentized(w);
    CheckOutcome::Ok(ResidualTable {
        keys: w.keys.clone(),
        raw: w.resid_raw.clone(),
        scaled: w.resid.clone(),
        fitted: w.fitted.clone(),
        hat: w.hat.clone(),
        internal,
        external,
    })
}

/// Internally and externally studentized residuals (see the module notes).
pub(crate) fn studentized(w: &Working) -> (Vec<Option<f64>>, Vec<Option<f64>>) {
    let s2 = w.mse();
    let df = w.df_resid();
    let mut internal = Vec::with_capacity(w.n);
    let mut external = Vec::with_capacity(w.n);
    for (&e, &h) in w.resid.iter().zip(&w.hat) {
        let omh = 1.0 - h;
        if omh <= HAT_ONE_TOL || s2 <= 0.0 {
            internal.push(None);
            external.push(None);
            continue;
        }
        internal.push(Some(e / (s2 * omh).sqrt()));
        if df < 2 {
            external.push(None);
            continue;
        }
        let s2i = (w.sse - e * e / omh) / (df - 1) as f64;
        external.push(if s2i > 0.0 { Some(e / (s2i * omh).sqrt()) } else { None });
    }
    (internal, external)
}

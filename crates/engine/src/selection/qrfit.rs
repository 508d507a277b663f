//! The refit of a reported model: a pivoted Householder QR of the model's own columns, with the
//! core's rank rule, followed by residuals computed from the data in compensated arithmetic.
//!
//! Many models are refitted on the same rows, so the data are factored once: `[W^½X, W^½y] =
//! Q R` for every column any of the models uses (the intercept first). For a model with columns
//! `S`, `R[:, S]` has the same Gram matrix as the model's data columns (`R[:, S]ᵀR[:, S] =
//! X_SᵀW X_S`), so a pivoted QR of `R[:, S]` — columns scaled to unit length, taken in design
//! order, a column set aside as aliased when its remaining length is at most the rank
//! tolerance, exactly the rule of [`crate::linalg::PivotedQr`] — yields the triangular factor and
//! the rank decision of the model's own QR at a cost independent of the row count (Golub & Van
//! Loan 2013, §6.5 on QR updating after column deletion, section from memory). Coefficients come from that factor;
//! the residuals `r = W^½(y − X_Sβ)` are then computed from the data in double-double
//! arithmetic and the coefficients polished by corrected semi-normal equation steps
//! `δ = R⁻¹R⁻ᵀ X_SᵀW^½ r` while the residual sum of squares falls (Björck 1987, "Stability
//! analysis of the method of seminormal equations", Linear Algebra Appl. 88/89, 31–48). Leverages
//! are the squared row lengths of `U = W^½X_S R⁻¹`, the model's thin orthonormal factor.

use crate::linalg::{QrOptions, two_sum};

use super::candidates::{AliasedRefit, Candidates, Refit};
use super::fastpath::householder_r;

/// The data of one set of rows, weighted, with the triangular factor of all their columns.
pub(crate) struct Factored {
    /// Rows used (indices into the candidates' rows).
    rows: Vec<usize>,
    /// `√w` of each used row (1 without weights).
    sw: Vec<f64>,
    /// Position of each candidate column in `cols` (`usize::MAX` when absent).
    pos: Vec<usize>,
    /// `[W^½X_cols, W^½y]`, `n × c` column-major.
    data: Vec<f64>,
    /// `R` of `data`, order `c = cols.len() + 1`, column-major.
    r: Vec<f64>,
    c: usize,
}

/// A model's triangular factor on unit-length columns (full rank: design order is pivot order).
pub(crate) struct ModelFactor {
    /// Lengths the columns were scaled by.
    scale: Vec<f64>,
    /// The triangular factor, order `k`, on the scaled pivoted columns.
    r: Vec<f64>,
    k: usize,
    /// `Qᵀ` applied to the factor's response column, first `k` entries.
    qty: Vec<f64>,
    /// The residual sum of squares read off the factor (the squared length of the rest of
    /// `Qᵀ` applied to the response column).
    pub sse: f64,
}

/// A solved model.
pub(crate) struct Solved {
    /// Coefficients in model-column order.
    pub beta: Vec<f64>,
    /// Weighted residuals `√wᵢ (yᵢ − xᵢβ)`.
    pub residuals: Vec<f64>,
    /// `Σ rᵢ²` in double-double arithmetic.
    pub sse: f64,
}

impl Factored {
    /// Factors the columns of `terms` (and the intercept) on `rows` (all when `None`).
    pub(crate) fn new(cands: &Candidates, terms: &[usize], rows: Option<&[usize]>) -> Factored {
        let rows: Vec<usize> = rows.map_or_else(|| (0..cands.nrows()).collect(), <[usize]>::to_vec);
        let n = rows.len();
        let sw: Vec<f64> = match cands.weights() {
            Some(w) => rows.iter().map(|&i| w[i].sqrt()).collect(),
            None => vec![1.0; n],
        };
        let mut cols: Vec<Option<usize>> = Vec::new();
        if cands.has_intercept() {
            cols.push(None);
        }
        let mut pos = vec![usize::MAX; cands.x().ncols()];
        let mut t: Vec<usize> = terms.to_vec();
        t.sort_unstable();
        t.dedup();
        for &term in &t {
            for j in cands.terms()[term].columns.clone() {
                pos[j] = cols.len();
                cols.push(Some(j));
            }
        }
        let c = cols.len() + 1;
        let mut a = Vec::with_capacity(n * c);
        for col in &cols {
            match col {
                None => a.extend_from_slice(&sw),
                Some(j) => {
                    let x = cands.x().column(*j);
                    a.extend(rows.iter().zip(&sw).map(|(&i, s)| x[i] * s));
                }
            }
        }
        let y = cands.y();
        a.extend(rows.iter().zip(&sw).map(|(&i, s)| y[i] * s));
        let data = a.clone();
        let r = householder_r(&mut a, n, c);
        Factored { rows, sw, pos, data, r, c }
    }

    /// The rows used.
    pub(crate) fn rows(&self) -> &[usize] {
        &self.rows
    }

    /// `√w` of each row used.
    pub(crate) fn sqrt_weights(&self) -> &[f64] {
        &self.sw
    }

    /// Refits the model made of `terms` (see the module notes).
    pub(crate) fn refit(
        &self,
        cands: &Candidates,
        terms: &[usize],
        qr: &QrOptions,
        leverages: bool,
    ) -> Result<Refit, AliasedRefit> {
        let mp = self.model_positions(cands, terms);
        if mp.is_empty() {
            let y = self.column(self.c - 1).to_vec();
            return Ok(Refit {
                sse: sum_sq_dd(&y),
                params: 0,
                weighted_residuals: y,
                leverages: leverages.then(|| vec![0.0; self.rows.len()]),
            });
        }
        match self.factor_model(&mp, qr) {
            Err(pos) => Err(cands.alias_explanation(terms, &self.rows, pos)),
            Ok(f) => {
                let (s, a) = self.solve(&mp, &f);
                let h = leverages.then(|| self.leverages(&f, &a));
                Ok(Refit { sse: s.sse, params: mp.len(), weighted_residuals: s.residuals, leverages: h })
            }
        }
    }

    /// Positions (in the factor) of the model-matrix columns of `terms`: the intercept first,
    /// then the terms' columns in the order given.
    pub(crate) fn model_positions(&self, cands: &Candidates, terms: &[usize]) -> Vec<usize> {
        let mut out = Vec::new();
        if cands.has_intercept() {
            out.push(0);
        }
        for &t in terms {
            out.extend(cands.terms()[t].columns.clone().map(|j| self.pos[j]));
        }
        out
    }

    /// The factor of the model whose columns sit at factor positions `mp`, or the position (in
    /// `mp`) of the first column whose remaining length is at most the rank tolerance.
    pub(crate) fn factor_model(&self, mp: &[usize], qr: &QrOptions) -> Result<ModelFactor, usize> {
        let k = mp.len();
        let c = self.c;
        // M = R[:, S] and the response column, c rows.
        let mut m = Vec::with_capacity(c * (k + 1));
        let mut scale = Vec::with_capacity(k);
        for &p in mp {
            let col = &self.r[p * c..p * c + c];
            let len = col.iter().map(|v| v * v).sum::<f64>().sqrt();
            let s = if len > 0.0 && len.is_finite() { len } else { 1.0 };
            scale.push(s);
            m.extend(col.iter().map(|v| v / s));
        }
        m.extend_from_slice(&self.r[(c - 1) * c..c * c]);
        let tol = if qr.rank_tolerance.is_finite() && qr.rank_tolerance >= 0.0 {
            qr.rank_tolerance
        } else {
            crate::linalg::DEFAULT_RANK_TOLERANCE
        };
        let rows = c;
        for step in 0..k {
            let col = &m[step * rows..(step + 1) * rows];
            let len = if step < rows { col[step..].iter().map(|v| v * v).sum::<f64>().sqrt() } else { 0.0 };
            if len <= tol {
                return Err(step);
            }
            // Householder reflection on rows step.., applied to later columns and the response.
            let x0 = col[step];
            let alpha = if x0 >= 0.0 { -len } else { len };
            let mut v: Vec<f64> = col[step..].to_vec();
            v[0] = x0 - alpha;
            let vtv: f64 = v.iter().map(|a| a * a).sum();
            for j in step + 1..=k {
                let cj = &mut m[j * rows + step..(j + 1) * rows];
                let dot: f64 = cj.iter().zip(&v).map(|(a, b)| a * b).sum();
                let f = 2.0 * dot / vtv;
                for (a, b) in cj.iter_mut().zip(&v) {
                    *a -= f * b;
                }
            }
            m[step * rows + step] = alpha;
            m[step * rows + step + 1..(step + 1) * rows].iter_mut().for_each(|a| *a = 0.0);
        }
        let mut r = vec![0.0; k * k];
        for j in 0..k {
            for i in 0..=j {
                r[j * k + i] = m[j * rows + i];
            }
        }
        let qty = m[k * rows..k * rows + k].to_vec();
        let sse = sum_sq_dd(&m[k * rows + k..(k + 1) * rows]);
        Ok(ModelFactor { scale, r, k, qty, sse })
    }

    /// The weighted data column at factor position `p` (`c − 1` is the response).
    fn column(&self, p: usize) -> &[f64] {
        let n = self.rows.len();
        &self.data[p * n..(p + 1) * n]
    }

    /// Solves the model and computes its residuals from the data (see the module notes).
    /// Returns the solution and the model's data columns (for the leverages).
    pub(crate) fn solve<'a>(&'a self, mp: &[usize], f: &ModelFactor) -> (Solved, Vec<&'a [f64]>) {
        let k = f.k;
        let y = self.column(self.c - 1);
        let x: Vec<&[f64]> = mp.iter().map(|&p| self.column(p)).collect();
        let unscale = |z: &[f64]| -> Vec<f64> { z.iter().zip(&f.scale).map(|(a, b)| a / b).collect() };
        let mut z = f.back(&f.qty);
        let mut beta = unscale(&z);
        let mut r = residual_dd(y, &x, &beta);
        let mut sse = sum_sq_dd(&r);
        // One corrected semi-normal step, kept only if it lowers the residual sum of squares.
        if k > 0 {
            let g: Vec<f64> = x
                .iter()
                .zip(&f.scale)
                .map(|(col, s)| col.iter().zip(&r).map(|(a, e)| a * e).sum::<f64>() / s)
                .collect();
            let d = f.back(&f.forward_t(&g));
            let zmax = z.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
            let dmax = d.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
            // A correction at rounding level changes nothing worth a second pass.
            if dmax > 64.0 * f64::EPSILON * zmax {
                let zn: Vec<f64> = z.iter().zip(&d).map(|(a, b)| a + b).collect();
                let bn = unscale(&zn);
                let rn = residual_dd(y, &x, &bn);
                let sn = sum_sq_dd(&rn);
                if sn < sse {
                    z = zn;
                    beta = bn;
                    r = rn;
                    sse = sn;
                }
            }
        }
        let _ = z;
        (Solved { beta, residuals: r, sse }, x)
    }

    /// Leverages: squared row lengths of `U = A R⁻¹` (A the scaled model columns), by forward
    /// substitution `Rᵀuᵢ = aᵢ` on blocks of rows (the inner loops run along the block, so they
    /// vectorise).
    pub(crate) fn leverages(&self, f: &ModelFactor, a: &[&[f64]]) -> Vec<f64> {
        const BLOCK: usize = 256;
        let n = self.rows.len();
        let k = f.k;
        let mut h = vec![0.0; n];
        let mut u = vec![0.0; k * BLOCK];
        let mut i0 = 0;
        while i0 < n {
            let b = BLOCK.min(n - i0);
            let hb = &mut h[i0..i0 + b];
            for (j, aj) in a.iter().enumerate().take(k) {
                let (done, rest) = u.split_at_mut(j * BLOCK);
                let uj = &mut rest[..b];
                let inv_s = 1.0 / f.scale[j];
                for (x, v) in uj.iter_mut().zip(&aj[i0..i0 + b]) {
                    *x = v * inv_s;
                }
                for l in 0..j {
                    let rl = f.r[j * k + l];
                    if rl != 0.0 {
                        for (x, y) in uj.iter_mut().zip(&done[l * BLOCK..l * BLOCK + b]) {
                            *x -= rl * y;
                        }
                    }
                }
                let inv = 1.0 / f.r[j * k + j];
                for (x, hh) in uj.iter_mut().zip(hb.iter_mut()) {
                    *x *= inv;
                    *hh += *x * *x;
                }
            }
            i0 += b;
        }
        h
    }
}

/// Veltkamp's split of a double into two halves of 26 bits (Dekker 1971).
#[inline]
fn split(a: f64) -> (f64, f64) {
    let c = 134_217_729.0 * a;
    let hi = c - (c - a);
    (hi, a - hi)
}

/// Dekker's error-free product `a·b = p + e` without a fused multiply-add (Dekker 1971, "A
/// floating-point technique for extending the available precision", Numer. Math. 18, 224–242),
/// which keeps the loop vectorisable on targets without a hardware FMA in their baseline.
#[inline]
fn two_prod_dekker(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    let (ah, al) = split(a);
    let (bh, bl) = split(b);
    (p, ((ah * bh - p) + ah * bl + al * bh) + al * bl)
}

/// `y − Az` for column vectors `A`, each row accumulated in double-double arithmetic.
fn residual_dd(y: &[f64], a: &[&[f64]], z: &[f64]) -> Vec<f64> {
    let mut hi = y.to_vec();
    let mut lo = vec![0.0; y.len()];
    for (col, &zj) in a.iter().zip(z) {
        let nz = -zj;
        for ((h, l), &x) in hi.iter_mut().zip(lo.iter_mut()).zip(col.iter()) {
            let (p, ep) = two_prod_dekker(x, nz);
            let (s, es) = two_sum(*h, p);
            *h = s;
            *l += ep + es;
        }
    }
    hi.iter().zip(&lo).map(|(h, l)| h + l).collect()
}

/// `Σ rᵢ²` in double-double arithmetic.
pub(crate) fn sum_sq_dd(r: &[f64]) -> f64 {
    let (mut hi, mut lo) = (0.0, 0.0);
    for &x in r {
        let (p, ep) = two_prod_dekker(x, x);
        let (s, es) = two_sum(hi, p);
        hi = s;
        lo += ep + es;
    }
    hi + lo
}

impl ModelFactor {
    /// Solves `R z = b`.
    fn back(&self, b: &[f64]) -> Vec<f64> {
        let k = self.k;
        let mut z = b[..k].to_vec();
        for i in (0..k).rev() {
            let (head, tail) = z.split_at_mut(i + 1);
            let s = tail.iter().enumerate().fold(head[i], |s, (o, zj)| s - self.r[(i + 1 + o) * k + i] * zj);
            head[i] = s / self.r[i * k + i];
        }
        z
    }

    /// Solves `Rᵀ h = g`.
    fn forward_t(&self, g: &[f64]) -> Vec<f64> {
        let k = self.k;
        let mut h = g[..k].to_vec();
        for i in 0..k {
            let col = &self.r[i * k..i * k + i];
            let s = col.iter().zip(&h[..i]).fold(h[i], |s, (r, hl)| s - r * hl);
            h[i] = s / self.r[i * k + i];
        }
        h
    }
}

//! Householder QR with column pivoting on unit-length-scaled columns, and least squares on it.
//!
//! The factorisation works on `A = X D⁻¹` where `D` holds the Euclidean lengths of the columns of
//! `X`, so every column of `A` has unit length before any rank decision is taken (Golub & Van
//! Loan, *Matrix Computations*, 4th ed., §5.4.1–5.4.2 on Householder QR with column pivoting;
//! Björck 1996, *Numerical Methods for Least Squares Problems*, §2.7.3 on column scaling).
//!
//! Pivoting follows the design order: at step `k` the next column in the caller's order is taken
//! unless its remaining length (its distance from the span of the columns already taken, on the
//! unit scale) is at most the rank tolerance, in which case it is moved to the end as aliased.
//! This is the limited form of column pivoting used for regression designs: a full-rank design is
//! factored in the analyst's order, and in a rank-deficient one the column named as aliased is
//! the first that lies in the span of the columns before it.
//!
//! Least-squares solutions are polished by iterative refinement on the augmented system
//! `[I X; Xᵀ 0][r; β] = [y; 0]` (Björck 1967, "Iterative refinement of linear least squares
//! solutions I", BIT 7, 257–278), with the residuals of each step accumulated in compensated
//! (double-double) arithmetic by error-free transformations (Ogita, Rump & Oishi 2005, "Accurate
//! sum and dot product", SIAM J. Sci. Comput. 26, 1955–1988).

use crate::matrix::Matrix;

/// Options of the QR factorisation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QrOptions {
    /// A column whose remaining length, on the unit-length scale, is at most this value is
    /// declared aliased (numerically a linear combination of the columns before it).
    pub rank_tolerance: f64,
}

/// The default rank tolerance.
///
/// On the unit-length scale the smallest remaining length met in NIST StRD Filip (a full-rank
/// 10th-degree polynomial whose unscaled condition number is about 10¹⁵) is 5.2·10⁻⁸, while an
/// exact linear dependence leaves a remaining length at rounding level (below 10⁻¹³ even for
/// 10⁵ rows; see the engine tests). The default sits between the two, more than three orders of
/// magnitude from each.
pub const DEFAULT_RANK_TOLERANCE: f64 = 1e-11;

impl Default for QrOptions {
    fn default() -> Self {
        Self { rank_tolerance: DEFAULT_RANK_TOLERANCE }
    }
}

/// Most refinement steps taken on one least-squares solve.
const MAX_REFINEMENT_STEPS: usize = 6;

/// A pivoted Householder QR factorisation `X D⁻¹ P = Q R` of a design matrix.
#[derive(Debug, Clone)]
pub struct PivotedQr {
    /// The original matrix, kept for refinement residuals.
    x: Matrix,
    /// Householder vectors below the diagonal and `R` on and above it, columns in pivot order.
    qr: Matrix,
    /// Householder scalars, one per factored column.
    tau: Vec<f64>,
    /// `perm[k]` is the original index of the column at pivot position `k`.
    perm: Vec<usize>,
    /// Euclidean length of each original column (1 for a zero column).
    scale: Vec<f64>,
    /// Numerical rank.
    rank: usize,
    /// Remaining length of each column (by original index) when it was taken or set aside.
    remaining: Vec<f64>,
}

/// A refined least-squares solution.
#[derive(Debug, Clone)]
pub struct LeastSquares {
    /// Coefficients in the original column order (aliased columns get 0).
    pub coefficients: Vec<f64>,
    /// Residuals `y − Xβ`.
    pub residuals: Vec<f64>,
    /// Refinement steps taken after the first solve.
    pub refinement_steps: usize,
}

impl PivotedQr {
    /// Factors `x`; never fails (rank deficiency is reported by [`PivotedQr::rank`]).
    pub fn factor(x: &Matrix, opts: &QrOptions) -> PivotedQr {
        let n = x.nrows();
        let p = x.ncols();
        let tol = if opts.rank_tolerance.is_finite() && opts.rank_tolerance >= 0.0 {
            opts.rank_tolerance
        } else {
            DEFAULT_RANK_TOLERANCE
        };
        let scale: Vec<f64> = (0..p)
            .map(|j| {
                let s = norm2(x.column(j));
                if s > 0.0 && s.is_finite() { s } else { 1.0 }
            })
            .collect();
        let mut qr = x.clone();
        for (j, &s) in scale.iter().enumerate() {
            // A division, not a multiplication by 1/s: one rounding instead of two.
            qr.column_mut(j).iter_mut().for_each(|v| *v /= s);
        }
        let mut perm: Vec<usize> = (0..p).collect();
        // How many reflectors have been applied to the column at each position.
        let mut applied = vec![0usize; p];
        let mut tau: Vec<f64> = Vec::with_capacity(p.min(n));
        let mut remaining = vec![0.0; p];
        let mut active_end = p;
        let mut k = 0;
        // Left-looking order: a column receives all earlier reflectors only when its turn comes,
        // so it stays in cache while they are applied (about a third of the memory traffic of
        // updating every later column after each reflector). The arithmetic is the same.
        while k < active_end && k < n {
            apply_reflectors(&mut qr, &tau, applied[k], k, k);
            applied[k] = k;
            let len = fast_norm2(&qr.column(k)[k..]);
            remaining[perm[k]] = len;
            if len <= tol {
                // Set the column aside at the very end, keeping aliased columns in design order.
                rotate_column_to_end(&mut qr, &mut perm, &mut applied, k);
                active_end -= 1;
                continue;
            }
            tau.push(householder(&mut qr, k));
            k += 1;
        }
        // Columns left when the rows ran out are combinations of those taken.
        for pos in k..active_end {
            remaining[perm[pos]] = 0.0;
        }
        // Bring every set-aside column up to date, for the coefficients of its combination.
        let rank = tau.len();
        for (pos, done) in applied.iter().enumerate().skip(rank) {
            apply_reflectors(&mut qr, &tau, *done, rank, pos);
        }
        PivotedQr { x: x.clone(), qr, tau, perm, scale, rank, remaining }
    }

    /// The numerical rank.
    pub fn rank(&self) -> usize {
        self.rank
    }

    /// `permutation()[k]` is the original index of the column at pivot position `k`.
    pub fn permutation(&self) -> &[usize] {
        &self.perm
    }

    /// Original indices of the columns beyond the rank (aliased), in design order.
    pub fn aliased_columns(&self) -> Vec<usize> {
        self.perm[self.rank..].to_vec()
    }

    /// The remaining length (unit-length scale) of each original column when it was taken or set
    /// aside: the sine of the angle between the column and the span of the columns before it.
    pub fn remaining_lengths(&self) -> &[f64] {
        &self.remaining
    }

    /// The smallest remaining length among the columns taken (1 for an empty design).
    pub fn min_remaining_length(&self) -> f64 {
        self.perm[..self.rank].iter().map(|&j| self.remaining[j]).fold(1.0, f64::min)
    }

    /// For an aliased column (original index `col`), the columns it is a combination of, as
    /// `(original index, coefficient in original units)` pairs, keeping those whose contribution
    /// on the unit-length scale exceeds `1e-7`.
    pub fn alias_combination(&self, col: usize) -> Vec<(usize, f64)> {
        let Some(pos) = self.perm.iter().position(|&j| j == col) else {
            return Vec::new();
        };
        if pos < self.rank {
            return Vec::new();
        }
        let r = self.rank;
        let rhs: Vec<f64> = (0..r).map(|i| self.qr.get(i, pos)).collect();
        let c = self.solve_r(&rhs);
        let mut out: Vec<(usize, f64)> = c
            .iter()
            .enumerate()
            .filter(|(_, v)| v.abs() > 1e-7)
            .map(|(k, &v)| {
                let j = self.perm[k];
                (j, v * self.scale[col] / self.scale[j])
            })
            .collect();
        out.sort_by_key(|&(j, _)| j);
        out
    }

    /// The least-squares coefficients of `y` on the design, in original column order.
    ///
    /// Meant for full-rank designs; for a rank-deficient one it returns the basic solution with
    /// the aliased coefficients set to 0.
    pub fn solve_least_squares(&self, y: &[f64]) -> Vec<f64> {
        self.least_squares(y).coefficients
    }

    /// The refined least-squares solution with its residuals (see the module notes).
    ///
    /// # Panics
    /// Panics if `y.len()` differs from the row count (a programming error).
    pub fn least_squares(&self, y: &[f64]) -> LeastSquares {
        let n = self.x.nrows();
        assert_eq!(y.len(), n, "PivotedQr::least_squares: wrong response length");
        let p = self.x.ncols();
        let r = self.rank;
        // Work in pivoted, scaled coordinates z, with β[perm[k]] = z[k] / scale[perm[k]].
        let mut z = vec![0.0; r];
        let mut res = vec![0.0; n];
        let mut f = y.to_vec();
        let mut g = vec![0.0; r];
        let mut steps = 0;
        let mut last_dz = f64::INFINITY;
        for it in 0..=MAX_REFINEMENT_STEPS {
            let (dr, dz) = self.augmented_correction(&f, &g);
            let dz_norm = norm2(&dz);
            if it > 0 && dz_norm > 0.5 * last_dz {
                // Refinement has stopped converging; keep the previous iterate.
                break;
            }
            for (a, b) in z.iter_mut().zip(&dz) {
                *a += b;
            }
            for (a, b) in res.iter_mut().zip(&dr) {
                *a += b;
            }
            if it > 0 {
                steps = it;
            }
            last_dz = dz_norm;
            // Each step shrinks the error by about the factor δ = ‖dz‖/‖z‖ of its own correction
            // (Björck 1967), so once a correction is below 10⁻⁸ the error left is below δ², under
            // the rounding level, and another step would change nothing.
            let z_norm = norm2(&z);
            if it == MAX_REFINEMENT_STEPS || dz_norm == 0.0 || (it > 0 && dz_norm <= 1e-8 * z_norm) {
                break;
            }
            // New residuals of the augmented system in compensated arithmetic.
            let beta = self.unpivot(&z);
            f = residual_dd(&self.x, y, &res, &beta);
            for (k, gk) in g.iter_mut().enumerate() {
                let j = self.perm[k];
                *gk = -dot_dd(self.x.column(j), &res) / self.scale[j];
            }
        }
        let beta = self.unpivot(&z);
        // Report residuals recomputed from the final coefficients in compensated arithmetic, so
        // they are exactly consistent with the coefficients to working precision.
        let zero = vec![0.0; n];
        let residuals = residual_dd(&self.x, y, &zero, &beta);
        debug_assert_eq!(beta.len(), p);
        LeastSquares { coefficients: beta, residuals, refinement_steps: steps }
    }

    /// `(XᵀX)⁻¹` in the original column order (for a rank-deficient design, the inverse of the
    /// full-rank part, with zero rows and columns for aliased columns).
    pub fn unscaled_covariance(&self) -> Matrix {
        let p = self.x.ncols();
        let r = self.rank;
        let rinv = self.r_inverse();
        let mut c = Matrix::zeros(p, p);
        for a in 0..r {
            for b in a..r {
                // (R⁻¹R⁻ᵀ)[a,b] = Σ_k Rinv[a,k] Rinv[b,k], k ≥ max(a,b) = b.
                let s: f64 = (b..r).map(|k| rinv.get(a, k) * rinv.get(b, k)).sum();
                let (ja, jb) = (self.perm[a], self.perm[b]);
                let v = s / (self.scale[ja] * self.scale[jb]);
                c.set(ja, jb, v);
                c.set(jb, ja, v);
            }
        }
        c
    }

    /// The leverages: the diagonal of the hat matrix `X(XᵀX)⁻¹Xᵀ = Q₁Q₁ᵀ`, computed as the
    /// squared row lengths of `Q₁ = X D⁻¹P R⁻¹`. Rows are processed in blocks that stay in
    /// cache; within a block the triangular solve runs column by column with vector updates.
    pub fn leverages(&self) -> Vec<f64> {
        const BLOCK: usize = 512;
        let n = self.x.nrows();
        let r = self.rank;
        let mut h = vec![0.0; n];
        let mut z = vec![0.0; BLOCK * r];
        for start in (0..n).step_by(BLOCK) {
            let len = BLOCK.min(n - start);
            for k in 0..r {
                let j = self.perm[k];
                let s = self.scale[j];
                let (done, rest) = z.split_at_mut(k * len);
                let zk = &mut rest[..len];
                for (v, x) in zk.iter_mut().zip(&self.x.column(j)[start..start + len]) {
                    *v = x / s;
                }
                let rk = self.qr.column(k);
                for (i, zi) in done.chunks_exact(len).enumerate() {
                    axpy(-rk[i], zi, zk);
                }
                let d = rk[k];
                for (hi, v) in h[start..start + len].iter_mut().zip(zk.iter_mut()) {
                    *v /= d;
                    *hi += *v * *v;
                }
            }
        }
        h
    }

    /// The thin orthonormal factor `Q₁` (n × rank).
    pub fn thin_q(&self) -> Matrix {
        let n = self.x.nrows();
        let r = self.rank;
        let mut q = Matrix::zeros(n, r);
        for k in 0..r {
            q.set(k, k, 1.0);
        }
        for k in (0..r).rev() {
            let t = self.tau[k];
            let v = &self.qr.column(k)[k + 1..];
            for j in k..r {
                let col = q.column_mut(j);
                let s = (col[k] + dot(&col[k + 1..], v)) * t;
                col[k] -= s;
                axpy(-s, v, &mut col[k + 1..]);
            }
        }
        q
    }

    /// `Qᵀ v` for a vector of length n.
    pub fn qt_mul(&self, v: &[f64]) -> Vec<f64> {
        let mut w = v.to_vec();
        for k in 0..self.rank {
            self.reflect(k, &mut w);
        }
        w
    }

    /// `Q v` for a vector of length n.
    pub fn q_mul(&self, v: &[f64]) -> Vec<f64> {
        let mut w = v.to_vec();
        for k in (0..self.rank).rev() {
            self.reflect(k, &mut w);
        }
        w
    }

    /// The quadratic form `x₀ᵀ(XᵀX)⁻¹x₀`, computed as `‖R⁻ᵀ(D⁻¹Pᵀx₀)‖²` for accuracy.
    ///
    /// # Panics
    /// Panics if `x0.len()` differs from the column count (a programming error).
    pub fn hat_quadratic(&self, x0: &[f64]) -> f64 {
        assert_eq!(x0.len(), self.x.ncols(), "PivotedQr::hat_quadratic: wrong row length");
        let z: Vec<f64> = (0..self.rank).map(|k| x0[self.perm[k]] / self.scale[self.perm[k]]).collect();
        let v = self.solve_rt(&z);
        v.iter().map(|a| a * a).sum()
    }

    /// The diagonal of `R` (on the unit-length scale), in pivot order.
    pub fn r_diagonal(&self) -> Vec<f64> {
        (0..self.rank).map(|k| self.qr.get(k, k)).collect()
    }

    /// Applies reflector `k` to a vector in place.
    fn reflect(&self, k: usize, w: &mut [f64]) {
        let v = &self.qr.column(k)[k + 1..];
        let s = (w[k] + dot(&w[k + 1..], v)) * self.tau[k];
        w[k] -= s;
        axpy(-s, v, &mut w[k + 1..]);
    }

    /// Solves the augmented correction system `[I A; Aᵀ 0][dr; dz] = [f; g]` for the scaled,
    /// pivoted full-rank part `A` (Björck 1967): `h = R⁻ᵀg`, `d = Qᵀf`, `dz = R⁻¹(d₁ − h)`,
    /// `dr = Q[h; d₂]`.
    fn augmented_correction(&self, f: &[f64], g: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let r = self.rank;
        let h = self.solve_rt(g);
        let mut d = self.qt_mul(f);
        let d1h: Vec<f64> = (0..r).map(|k| d[k] - h[k]).collect();
        let dz = self.solve_r(&d1h);
        d[..r].copy_from_slice(&h);
        let dr = self.q_mul(&d);
        (dr, dz)
    }

    /// Solves `R z = b` (back substitution on the leading rank × rank block).
    fn solve_r(&self, b: &[f64]) -> Vec<f64> {
        let r = self.rank;
        let mut z = b[..r].to_vec();
        for k in (0..r).rev() {
            let mut s = z[k];
            for (j, zj) in z.iter().enumerate().take(r).skip(k + 1) {
                s -= self.qr.get(k, j) * zj;
            }
            z[k] = s / self.qr.get(k, k);
        }
        z
    }

    /// Solves `Rᵀ h = g` (forward substitution).
    fn solve_rt(&self, g: &[f64]) -> Vec<f64> {
        let r = self.rank;
        let mut h = g[..r].to_vec();
        for k in 0..r {
            let s = h[k] - dot(&self.qr.column(k)[..k], &h[..k]);
            h[k] = s / self.qr.get(k, k);
        }
        h
    }

    /// `R⁻¹` of the leading rank × rank block (upper triangular).
    fn r_inverse(&self) -> Matrix {
        let r = self.rank;
        let mut inv = Matrix::zeros(r, r);
        for j in 0..r {
            let mut e = vec![0.0; r];
            e[j] = 1.0;
            let col = self.solve_r(&e);
            for (i, v) in col.into_iter().enumerate().take(j + 1) {
                inv.set(i, j, v);
            }
        }
        inv
    }

    /// Maps pivoted scaled coordinates back to coefficients in the original order.
    fn unpivot(&self, z: &[f64]) -> Vec<f64> {
        let mut beta = vec![0.0; self.x.ncols()];
        for (k, &v) in z.iter().enumerate() {
            let j = self.perm[k];
            beta[j] = v / self.scale[j];
        }
        beta
    }
}

/// Moves column `k` (with its permutation entry and reflector count) to the last position,
/// shifting the rest left.
fn rotate_column_to_end(qr: &mut Matrix, perm: &mut [usize], applied: &mut [usize], k: usize) {
    let n = qr.nrows();
    qr.as_mut_slice()[k * n..].rotate_left(n);
    perm[k..].rotate_left(1);
    applied[k..].rotate_left(1);
}

/// Applies reflectors `from..to` (stored in the columns of those positions) to the column at
/// position `pos ≥ to`.
fn apply_reflectors(qr: &mut Matrix, tau: &[f64], from: usize, to: usize, pos: usize) {
    let n = qr.nrows();
    let data = qr.as_mut_slice();
    let (left, right) = data.split_at_mut(pos * n);
    let col = &mut right[..n];
    for i in from..to {
        let t = tau[i];
        if t == 0.0 {
            continue;
        }
        let v = &left[i * n + i + 1..(i + 1) * n];
        let s = (col[i] + dot(&col[i + 1..], v)) * t;
        col[i] -= s;
        axpy(-s, v, &mut col[i + 1..]);
    }
}

/// Computes the Householder reflector that zeroes column `k` below the diagonal; stores `β` on
/// the diagonal and `v` (with implicit leading 1) below it, and returns `τ`
/// (`H = I − τ v vᵀ`; Golub & Van Loan, Algorithm 5.1.1, in the LAPACK normalisation).
fn householder(qr: &mut Matrix, k: usize) -> f64 {
    let col = &mut qr.column_mut(k)[k..];
    let norm = norm2(col);
    let x0 = col[0];
    if norm == 0.0 {
        return 0.0;
    }
    let beta = -norm.copysign(x0);
    let tau = (beta - x0) / beta;
    let inv = 1.0 / (x0 - beta);
    for v in &mut col[1..] {
        *v *= inv;
    }
    col[0] = beta;
    tau
}

/// The Euclidean length of a vector, guarded against overflow and underflow.
pub fn norm2(v: &[f64]) -> f64 {
    let m = v.iter().fold(0.0_f64, |m, x| m.max(x.abs()));
    if m == 0.0 || !m.is_finite() {
        return m;
    }
    let s: f64 = v.iter().map(|x| (x / m) * (x / m)).sum();
    m * s.sqrt()
}

/// The Euclidean length by a plain sum of squares, falling back to [`norm2`] when that could
/// have overflowed or underflowed.
fn fast_norm2(v: &[f64]) -> f64 {
    let s = dot(v, v);
    if s.is_finite() && s > 1e-280 { s.sqrt() } else { norm2(v) }
}

/// A dot product with four independent accumulators (so the compiler can use vector lanes).
#[inline]
pub fn dot(a: &[f64], b: &[f64]) -> f64 {
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut acc = [0.0_f64; 4];
    let ca = a.chunks_exact(4);
    let cb = b.chunks_exact(4);
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        acc[0] += x[0] * y[0];
        acc[1] += x[1] * y[1];
        acc[2] += x[2] * y[2];
        acc[3] += x[3] * y[3];
    }
    let mut s = (acc[0] + acc[1]) + (acc[2] + acc[3]);
    for (x, y) in ra.iter().zip(rb) {
        s += x * y;
    }
    s
}

/// `y ← y + α·x`.
#[inline]
pub fn axpy(alpha: f64, x: &[f64], y: &mut [f64]) {
    for (yi, xi) in y.iter_mut().zip(x) {
        *yi += alpha * xi;
    }
}

/// Error-free sum: `a + b = s + e` exactly (Knuth's TwoSum).
#[inline]
pub fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    let e = (a - (s - bb)) + (b - bb);
    (s, e)
}

/// Error-free product: `a · b = p + e` exactly.
///
/// With hardware fused multiply-add (`target_feature = "fma"`) the error is `fma(a, b, −p)`.
/// Without it, `f64::mul_add` becomes a library call that is both slow and opaque to
/// vectorisation, so Dekker's product with Veltkamp's splitting is used instead (Dekker 1971, "A
/// floating-point technique for extending the available precision", Numer. Math. 18, 224–242);
/// both are exact barring overflow.
#[inline]
pub fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    #[cfg(target_feature = "fma")]
    {
        (p, a.mul_add(b, -p))
    }
    #[cfg(not(target_feature = "fma"))]
    {
        let (ah, al) = split(a);
        let (bh, bl) = split(b);
        let e = ((ah * bh - p) + ah * bl + al * bh) + al * bl;
        (p, e)
    }
}

/// Veltkamp's splitting of a double into two halves of 26 significant bits.
#[cfg(not(target_feature = "fma"))]
#[inline]
fn split(a: f64) -> (f64, f64) {
    const FACTOR: f64 = 134_217_729.0; // 2^27 + 1
    let c = FACTOR * a;
    let h = c - (c - a);
    (h, a - h)
}

/// A dot product accumulated in double-double arithmetic (Ogita, Rump & Oishi's Dot2): the result
/// is as accurate as if computed in twice the working precision, then rounded.
pub fn dot_dd(a: &[f64], b: &[f64]) -> f64 {
    // Four independent double-double accumulators, combined exactly at the end.
    let n = a.len().min(b.len());
    let (a, b) = (&a[..n], &b[..n]);
    let mut hi = [0.0_f64; 4];
    let mut lo = [0.0_f64; 4];
    let ca = a.chunks_exact(4);
    let cb = b.chunks_exact(4);
    let (ra, rb) = (ca.remainder(), cb.remainder());
    for (x, y) in ca.zip(cb) {
        for l in 0..4 {
            let (p, ep) = two_prod(x[l], y[l]);
            let (s, es) = two_sum(hi[l], p);
            hi[l] = s;
            lo[l] += ep + es;
        }
    }
    let mut h = 0.0;
    let mut lsum = 0.0;
    for l in 0..4 {
        let (s, e) = two_sum(h, hi[l]);
        h = s;
        lsum += e + lo[l];
    }
    for (&x, &y) in ra.iter().zip(rb) {
        let (p, ep) = two_prod(x, y);
        let (s, es) = two_sum(h, p);
        h = s;
        lsum += ep + es;
    }
    h + lsum
}

/// `Xβ` with every row accumulated in double-double arithmetic.
pub fn mul_vec_dd(x: &Matrix, beta: &[f64]) -> Vec<f64> {
    let zero = vec![0.0; x.nrows()];
    residual_dd(x, &zero, &zero, &beta.iter().map(|b| -b).collect::<Vec<f64>>())
}

/// A sum accumulated in double-double arithmetic (Ogita, Rump & Oishi's Sum2).
pub fn sum_dd(a: impl IntoIterator<Item = f64>) -> f64 {
    let mut hi = 0.0;
    let mut lo = 0.0;
    for x in a {
        let (s, e) = two_sum(hi, x);
        hi = s;
        lo += e;
    }
    hi + lo
}

/// `y − r − Xβ` with every row accumulated in double-double arithmetic (column by column, so
/// the row updates are independent and vectorise).
pub fn residual_dd(x: &Matrix, y: &[f64], r: &[f64], beta: &[f64]) -> Vec<f64> {
    let n = x.nrows();
    let mut hi = Vec::with_capacity(n);
    let mut lo = Vec::with_capacity(n);
    for (&yi, &ri) in y.iter().zip(r) {
        let (s, e) = two_sum(yi, -ri);
        hi.push(s);
        lo.push(e);
    }
    for (j, &b) in beta.iter().enumerate() {
        if b == 0.0 {
            continue;
        }
        let nb = -b;
        for ((h, l), &a) in hi.iter_mut().zip(lo.iter_mut()).zip(x.column(j)) {
            let (p, ep) = two_prod(a, nb);
            let (s, es) = two_sum(*h, p);
            *h = s;
            *l += ep + es;
        }
    }
    hi.iter().zip(&lo).map(|(h, l)| h + l).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn solves_a_small_problem_exactly() {
        // y = 1 + 2x on four points: the fit is exact.
        let x = Matrix::from_columns(&[vec![1.0; 4], vec![0.0, 1.0, 2.0, 3.0]]);
        let y = [1.0, 3.0, 5.0, 7.0];
        let qr = PivotedQr::factor(&x, &QrOptions::default());
        assert_eq!(qr.rank(), 2);
        let ls = qr.least_squares(&y);
        assert!((ls.coefficients[0] - 1.0).abs() < 1e-15);
        assert!((ls.coefficients[1] - 2.0).abs() < 1e-15);
        assert!(ls.residuals.iter().all(|r| r.abs() < 1e-14));
        let h = qr.leverages();
        // Leverages of a straight line: 1/n + (x - x̄)²/Sxx with x̄ = 1.5, Sxx = 5.
        for (i, hi) in h.iter().enumerate() {
            let d = i as f64 - 1.5;
            assert!((hi - (0.25 + d * d / 5.0)).abs() < 1e-14);
        }
        let c = qr.unscaled_covariance();
        // (XᵀX)⁻¹ for this design is [[0.7, -0.3], [-0.3, 0.2]].
        assert!((c.get(0, 0) - 0.7).abs() < 1e-14);
        assert!((c.get(0, 1) + 0.3).abs() < 1e-14);
        assert!((c.get(1, 1) - 0.2).abs() < 1e-14);
    }

    #[test]
    fn detects_and_explains_an_exact_dependence() {
        let a = vec![0.2, 0.5, 0.7, 0.1, 0.9];
        let b: Vec<f64> = a.iter().map(|v| 1.0 - v).collect();
        let x = Matrix::from_columns(&[vec![1.0; 5], a, b]);
        let qr = PivotedQr::factor(&x, &QrOptions::default());
        assert_eq!(qr.rank(), 2);
        assert_eq!(qr.aliased_columns(), vec![2]);
        let comb = qr.alias_combination(2);
        assert_eq!(comb.len(), 2);
        assert!((comb[0].1 - 1.0).abs() < 1e-12 && (comb[1].1 + 1.0).abs() < 1e-12);
    }

    #[test]
    fn compensated_dot_recovers_cancelled_digits() {
        // 1e16 + 1 − 1e16 is 1 exactly; plain summation returns 0 or 2.
        assert_eq!(dot_dd(&[1e16, 1.0, -1e16], &[1.0, 1.0, 1.0]), 1.0);
        assert_eq!(sum_dd([1e16, 1.0, -1e16]), 1.0);
    }
}

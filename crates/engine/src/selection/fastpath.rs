//! The fast path of best-subset search: a drop-one tree over the triangular factor of the
//! centred, unit-scaled candidate columns, exhaustive or pruned by Furnival–Wilson bounds.
//!
//! # The tree
//! A node holds an upper-triangular factor `R` of its *free* candidate columns and the response,
//! after the node's *kept* columns (and the forced terms and the intercept) have been projected
//! out. The node stands for every model `K ∪ G` with `G` a subset of the free terms
//! `g₁ … g_m`; its largest model is `L = K ∪ {g₁ … g_m}`, whose residual sum of squares is the
//! square of the last diagonal element of `R`. Child `t` keeps `g₁ … g_{t−1}`, drops `g_t` and
//! leaves `g_{t+1} … g_m` free; its largest model is `L ∖ {g_t}`. Its factor is the trailing
//! block of `R` from `g_t` on with `g_t`'s columns removed, brought back to triangular form by
//! Householder reflections of length `w + 1` (`w` = columns of `g_t`), so a child costs
//! `O(w·c²)` for `c` remaining columns and every model is visited exactly once (this is the
//! "inverse" tree of Furnival & Wilson 1974, carried out on `R` by orthogonal updates instead of
//! on the inverse cross-product matrix, so rounding errors grow with the condition number of the
//! columns, not with its square).
//!
//! # Bounds
//! The residual sum of squares can only fall when terms are added. A model in the subtree of
//! child `t` of size `s` leaves out `g_t` and `d = |L| − 1 − s` further free terms `u > t`, so its
//! RSS is at least `max(RSS(L∖g_t), d-th smallest RSS(L∖g_u), u > t)` (Furnival & Wilson 1974,
//! the bound on a subtree by the regressions of its largest models). A subtree is skipped when,
//! for every size it contains, this bound exceeds the current `m`-th best RSS of that size.
//!
//! # Exactness
//! Every RSS carries an error estimate `e` (see [`FastPath::error_estimate`]); a model enters the
//! pool of its size when `RSS − e` does not exceed the `m`-th smallest `RSS + e`, bounds are
//! compared as `bound − e`, and the caller refits the whole pool by pivoted QR and ranks by the
//! refitted SSE. The fast path therefore only narrows the field; ties within the error estimate
//! are settled by the QR refits.

use std::sync::atomic::{AtomicBool, Ordering};

use super::candidates::Candidates;
use crate::error::{EngineError, Result};

/// One model kept in a size's pool.
#[derive(Debug, Clone, Copy)]
pub(crate) struct PoolEntry {
    /// Bit `q` set when the free term at root position `q` is in the model.
    pub mask: u64,
    /// The fast-path RSS, on the scale where the total sum of squares is 1.
    pub rss: f64,
    /// Its error estimate on the same scale.
    pub err: f64,
}

/// The best models of one size so far, with the margin pool.
#[derive(Debug, Clone)]
struct Board {
    top: usize,
    /// The `top` smallest `RSS + e`, ascending.
    his: Vec<f64>,
    pool: Vec<PoolEntry>,
    next_compact: usize,
}

impl Board {
    fn new(top: usize) -> Self {
        Board { top, his: Vec::with_capacity(top + 1), pool: Vec::new(), next_compact: 4 * top + 32 }
    }

    /// The current threshold: no model whose `RSS − e` exceeds it can be among the best `top`.
    #[inline]
    fn threshold(&self) -> f64 {
        if self.his.len() < self.top { f64::INFINITY } else { self.his[self.top - 1] }
    }

    #[inline]
    fn offer(&mut self, mask: u64, rss: f64, err: f64) {
        let lo = rss - err;
        if lo > self.threshold() {
            return;
        }
        self.pool.push(PoolEntry { mask, rss, err });
        let hi = rss + err;
        if self.his.len() < self.top || hi < self.his[self.top - 1] {
            let pos = self.his.partition_point(|&v| v <= hi);
            self.his.insert(pos, hi);
            self.his.truncate(self.top);
        }
        if self.pool.len() >= self.next_compact {
            let t = self.threshold();
            self.pool.retain(|e| e.rss - e.err <= t);
            self.next_compact = (2 * self.pool.len()).max(4 * self.top + 32);
        }
    }

    fn finish(mut self) -> Vec<PoolEntry> {
        let t = self.threshold();
        self.pool.retain(|e| e.rss - e.err <= t);
        self.pool.sort_by(|a, b| (a.rss - a.err).total_cmp(&(b.rss - b.err)));
        self.pool
    }
}

/// What the fast path hands back to the search.
#[derive(Debug, Clone)]
pub(crate) struct FastResult {
    /// Pools by number of free terms in the model (index 0 = no free term).
    pub pools: Vec<Vec<PoolEntry>>,
    /// Aliased models met, by number of free terms.
    pub aliased: Vec<u64>,
    /// Models left out because they have no residual degrees of freedom, by number of free terms.
    pub no_df: Vec<u64>,
    /// Models whose RSS was computed.
    pub evaluated: u64,
    /// Models never computed because a bound showed they cannot be among the best.
    pub pruned: u64,
    /// Models never computed because they are larger than the maximum size.
    pub beyond_max: u64,
    /// Free term (candidate index) at each root position.
    pub order: Vec<usize>,
}

/// Settings of one fast-path run.
pub(crate) struct FastSettings<'a> {
    pub top: usize,
    /// Largest number of free terms in a reported model.
    pub max_free: usize,
    pub prune: bool,
    pub progress: Option<&'a (dyn Fn(f64) + Sync)>,
    pub cancel: Option<&'a AtomicBool>,
}

/// The root factor and everything the tree needs about the columns.
pub(crate) struct FastPath {
    /// Free terms (candidate indices) in root order.
    order: Vec<usize>,
    /// Width (columns) of the free term at each root position.
    widths: Vec<usize>,
    /// First root column of each root position.
    col_off: Vec<usize>,
    /// Alias tolerance of each root column (on the unit scale of the centred column).
    col_tol: Vec<f64>,
    /// Root factor, `c × c` column-major, `c` = free columns + 1 (the response last).
    root: Vec<f64>,
    c: usize,
    /// Smallest diagonal-to-tolerance ratio and smallest diagonal among the forced columns.
    forced_ratio: f64,
    forced_mind: f64,
    /// Intercept plus forced columns.
    base_params: usize,
    n: usize,
    /// Rounding unit scaled by the size of the problem (see `error_estimate`).
    eps: f64,
    /// Largest ratio of a column's raw length to its centred length (the refit's extra error).
    lambda: f64,
}

/// Householder QR of the column-major `n × c` matrix `a` (overwritten); returns `R` as a
/// `c × c` column-major matrix (rows beyond `n` are zero).
pub(crate) fn householder_r(a: &mut [f64], n: usize, c: usize) -> Vec<f64> {
    let steps = n.min(c);
    for k in 0..steps {
        let (head, tail) = a.split_at_mut((k + 1) * n);
        let col = &mut head[k * n..];
        let sq: f64 = col[k..].iter().map(|v| v * v).sum();
        let norm = sq.sqrt();
        if norm == 0.0 {
            continue;
        }
        let x0 = col[k];
        let alpha = if x0 >= 0.0 { -norm } else { norm };
        let v0 = x0 - alpha;
        // v = (v0, col[k+1..]); vᵀv = v0² + (sq − x0²).
        let vtv = v0 * v0 + (sq - x0 * x0);
        col[k] = v0;
        if vtv > 0.0 {
            let v = &col[k..];
            for j in 0..(c - k - 1) {
                let cj = &mut tail[j * n + k..(j + 1) * n];
                let dot: f64 = cj.iter().zip(v).map(|(a, b)| a * b).sum();
                let f = 2.0 * dot / vtv;
                for (a, b) in cj.iter_mut().zip(v) {
                    *a -= f * b;
                }
            }
        }
        col[k] = alpha;
        col[k + 1..].iter_mut().for_each(|v| *v = 0.0);
    }
    let mut r = vec![0.0; c * c];
    for j in 0..c {
        let top = (j + 1).min(n);
        r[j * c..j * c + top].copy_from_slice(&a[j * n..j * n + top]);
    }
    r
}

/// Forms a child factor: the trailing block of the `c × c` factor `r` from column `start`, without
/// its first `w` columns, re-triangularised by Householder reflections of length `w + 1`. Writes
/// the `cc × cc` result (`cc = c − start − w`) into `out`.
pub(crate) fn drop_block(r: &[f64], c: usize, start: usize, w: usize, tmp: &mut Vec<f64>, out: &mut [f64]) {
    let cc = c - start - w;
    let rows = cc + w;
    tmp.clear();
    tmp.resize(rows * cc, 0.0);
    for j in 0..cc {
        let src_col = start + w + j;
        let nz = w + j + 1;
        tmp[j * rows..j * rows + nz].copy_from_slice(&r[src_col * c + start..src_col * c + start + nz]);
    }
    for j in 0..cc {
        let base = j * rows;
        let x0 = tmp[base + j];
        let s: f64 = tmp[base + j + 1..base + j + 1 + w].iter().map(|v| v * v).sum();
        if s == 0.0 {
            continue;
        }
        let norm = (x0 * x0 + s).sqrt();
        let alpha = if x0 >= 0.0 { -norm } else { norm };
        let v0 = x0 - alpha;
        let vtv = v0 * v0 + s;
        // Apply H = I − 2vvᵀ/vᵀv to the later columns on rows j ..= j + w.
        for k in j + 1..cc {
            let kb = k * rows;
            let mut dot = v0 * tmp[kb + j];
            for i in 1..=w {
                dot += tmp[base + j + i] * tmp[kb + j + i];
            }
            let f = 2.0 * dot / vtv;
            tmp[kb + j] -= f * v0;
            for i in 1..=w {
                tmp[kb + j + i] -= f * tmp[base + j + i];
            }
        }
        tmp[base + j] = alpha;
        tmp[base + j + 1..base + j + 1 + w].iter_mut().for_each(|v| *v = 0.0);
    }
    for j in 0..cc {
        out[j * cc..j * cc + j + 1].copy_from_slice(&tmp[j * rows..j * rows + j + 1]);
        out[j * cc + j + 1..(j + 1) * cc].iter_mut().for_each(|v| *v = 0.0);
    }
}

/// Weighted, centred (with an intercept) copy of a column and its raw weighted length.
fn prepared(col: &[f64], sw: Option<&[f64]>, w: Option<&[f64]>, intercept: bool) -> (Vec<f64>, f64) {
    let raw: Vec<f64> = match sw {
        Some(s) => col.iter().zip(s).map(|(a, b)| a * b).collect(),
        None => col.to_vec(),
    };
    let raw_len = raw.iter().map(|v| v * v).sum::<f64>().sqrt();
    if !intercept {
        return (raw, raw_len);
    }
    // Two-pass weighted mean with a correction pass.
    let (sumw, mean) = match w {
        Some(w) => {
            let sw: f64 = w.iter().sum();
            (sw, col.iter().zip(w).map(|(a, b)| a * b).sum::<f64>() / sw)
        }
        None => (col.len() as f64, col.iter().sum::<f64>() / col.len() as f64),
    };
    let corr = match w {
        Some(w) => col.iter().zip(w).map(|(a, b)| (a - mean) * b).sum::<f64>() / sumw,
        None => col.iter().map(|a| a - mean).sum::<f64>() / sumw,
    };
    let m = mean + corr;
    let out = match sw {
        Some(s) => col.iter().zip(s).map(|(a, b)| (a - m) * b).collect(),
        None => col.iter().map(|a| a - m).collect(),
    };
    (out, raw_len)
}

impl FastPath {
    /// Builds the root factor for the free terms `free` (candidate indices) with `forced` terms
    /// projected out, and orders the free terms by how much the full model's RSS rises when each
    /// is dropped (largest first), which makes the bounds bite early.
    pub(crate) fn new(
        cands: &Candidates,
        forced: &[usize],
        free: &[usize],
        rank_tolerance: f64,
    ) -> Result<FastPath> {
        let n = cands.nrows();
        let w = cands.weights();
        let sw: Option<Vec<f64>> = w.map(|w| w.iter().map(|v| v.sqrt()).collect());
        let intercept = cands.has_intercept();
        let terms = cands.terms();
        let forced_cols: usize = forced.iter().map(|&t| terms[t].columns.len()).sum();
        let free_cols: usize = free.iter().map(|&t| terms[t].columns.len()).sum();
        let ctot = forced_cols + free_cols + 1;
        let mut a = Vec::with_capacity(n * ctot);
        let mut tol = Vec::with_capacity(ctot);
        let mut lambda: f64 = 1.0;
        let push = |a: &mut Vec<f64>, col: &[f64]| -> (f64, f64) {
            let (mut v, raw_len) = prepared(col, sw.as_deref(), w, intercept);
            let len = v.iter().map(|x| x * x).sum::<f64>().sqrt();
            if len > 0.0 && len.is_finite() {
                v.iter_mut().for_each(|x| *x /= len);
            }
            a.extend_from_slice(&v);
            (len, raw_len)
        };
        for &t in forced.iter().chain(free) {
            for j in terms[t].columns.clone() {
                let (len, raw_len) = push(&mut a, cands.x().column(j));
                if len > 0.0 && len.is_finite() {
                    let ratio = raw_len / len;
                    lambda = lambda.max(ratio);
                    tol.push(rank_tolerance * ratio);
                } else {
                    tol.push(f64::INFINITY);
                }
            }
        }
        let (ylen, _) = push(&mut a, cands.y());
        if !(ylen > 0.0 && ylen.is_finite()) {
            return Err(EngineError::ConstantResponse { column: cands.response_label().to_owned() });
        }
        tol.push(0.0);
        let r_all = householder_r(&mut a, n, ctot);
        drop(a);
        let mut forced_ratio = f64::INFINITY;
        let mut forced_mind: f64 = 1.0;
        for j in 0..forced_cols {
            let d = r_all[j * ctot + j].abs();
            forced_ratio = forced_ratio.min(d / tol[j]);
            if d > tol[j] {
                forced_mind = forced_mind.min(d);
            }
        }
        let c = free_cols + 1;
        let mut root = vec![0.0; c * c];
        for j in 0..c {
            for i in 0..=j {
                root[j * c + i] = r_all[(forced_cols + j) * ctot + forced_cols + i];
            }
        }
        let col_tol: Vec<f64> = tol[forced_cols..forced_cols + free_cols].to_vec();
        let widths: Vec<usize> = free.iter().map(|&t| terms[t].columns.len()).collect();
        // Order the free terms by the rise in RSS when each is dropped from the full model.
        let rss_full = root[c * c - 1].powi(2);
        let mut tmp = Vec::new();
        let mut start = 0;
        let mut rise = Vec::with_capacity(free.len());
        for (q, &wq) in widths.iter().enumerate() {
            let cc = c - start - wq;
            let mut out = vec![0.0; cc * cc];
            drop_block(&root, c, start, wq, &mut tmp, &mut out);
            rise.push((q, out[cc * cc - 1].powi(2) - rss_full));
            start += wq;
        }
        rise.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.cmp(&b.0)));
        let old_off: Vec<usize> = widths
            .iter()
            .scan(0, |s, &w| {
                let o = *s;
                *s += w;
                Some(o)
            })
            .collect();
        let mut perm_cols = Vec::with_capacity(c);
        for &(q, _) in &rise {
            perm_cols.extend(old_off[q]..old_off[q] + widths[q]);
        }
        perm_cols.push(c - 1);
        let mut m = Vec::with_capacity(c * c);
        for &j in &perm_cols {
            m.extend_from_slice(&root[j * c..(j + 1) * c]);
        }
        let root = householder_r(&mut m, c, c);
        let col_tol: Vec<f64> = perm_cols[..c - 1].iter().map(|&j| col_tol[j]).collect();
        let order: Vec<usize> = rise.iter().map(|&(q, _)| free[q]).collect();
        let widths: Vec<usize> = rise.iter().map(|&(q, _)| widths[q]).collect();
        let col_off: Vec<usize> = widths
            .iter()
            .scan(0, |s, &w| {
                let o = *s;
                *s += w;
                Some(o)
            })
            .collect();
        let eps = f64::EPSILON * ((c * (free.len() + 1)) as f64 + (n as f64).sqrt());
        Ok(FastPath {
            order,
            widths,
            col_off,
            col_tol,
            root,
            c,
            forced_ratio,
            forced_mind,
            base_params: usize::from(intercept) + forced_cols,
            n,
            eps,
            lambda,
        })
    }

    /// The error estimate of a fast-path RSS (total sum of squares scaled to 1).
    ///
    /// Householder and Givens updates are backward stable: the computed factor is exact for
    /// columns perturbed by about `ε‖x‖` with `ε` a modest multiple of the rounding unit
    /// (Higham 2002, *Accuracy and Stability of Numerical Algorithms*, §19.3, section from memory). For unit-length
    /// columns the first-order change of the residual sum of squares is then at most
    /// `2ε‖r‖κ + (εκ)²` (Golub & Van Loan 2013, §5.3, section from memory), with `κ` the condition number of the
    /// model's columns. `κ` is estimated by `√p / d_min`, `d_min` the smallest remaining length
    /// of a column along the tree path (every remaining length is at least the smallest singular
    /// value), times the largest ratio of a raw to a centred column length, which covers the
    /// refit on uncentred columns. A safety factor of 16 covers the gap between estimate and
    /// bound.
    #[inline]
    fn error_estimate(&self, rss: f64, params: usize, mind: f64) -> f64 {
        let kappa = (params.max(1) as f64).sqrt() / mind.max(f64::MIN_POSITIVE) * self.lambda;
        let ek = self.eps * kappa;
        16.0 * (2.0 * rss.max(0.0).sqrt() * ek + ek * ek)
    }

    /// Runs the tree and returns the pools.
    pub(crate) fn run(&self, s: &FastSettings<'_>) -> Result<FastResult> {
        let p = self.order.len();
        let mut tree = Tree {
            fp: self,
            prune: s.prune,
            max_free: s.max_free.min(p),
            boards: (0..=p).map(|_| Board::new(s.top)).collect(),
            aliased: vec![0; p + 1],
            no_df: vec![0; p + 1],
            evaluated: 0,
            pruned: 0,
            beyond_max: 0,
            resolved: 0.0,
            total: (p as f64).exp2(),
            arena: vec![Vec::new(); p + 1],
            kids: vec![Vec::new(); p + 1],
            ratios: vec![Vec::new(); p + 1],
            tmp: Vec::new(),
            next_report: 1 << 14,
            progress: s.progress,
            cancel: s.cancel,
            cancelled: false,
        };
        // The root: the largest model.
        let c = self.c;
        let mut ratio = self.forced_ratio;
        let mut mind = self.forced_mind;
        for j in 0..c - 1 {
            let d = self.root[j * c + j].abs();
            ratio = ratio.min(d / self.col_tol[j]);
            if d > self.col_tol[j] {
                mind = mind.min(d);
            }
        }
        let full_mask = if p == 64 { u64::MAX } else { (1u64 << p) - 1 };
        let rss = self.root[c * c - 1].powi(2);
        tree.offer(p, c - 1, full_mask, rss, ratio, mind);
        if p > 0 {
            let all: Vec<usize> = (0..p).collect();
            tree.visit(0, &self.root, c, &all, 0, 0, self.forced_ratio, self.forced_mind, full_mask);
        }
        if let Some(f) = s.progress {
            f(1.0);
        }
        if tree.cancelled {
            return Err(EngineError::Cancelled);
        }
        Ok(FastResult {
            pools: tree.boards.into_iter().map(Board::finish).collect(),
            aliased: tree.aliased,
            no_df: tree.no_df,
            evaluated: tree.evaluated,
            pruned: tree.pruned,
            beyond_max: tree.beyond_max,
            order: self.order.clone(),
        })
    }
}

/// Per-child facts kept while a node's children are processed.
#[derive(Debug, Clone, Copy)]
struct Kid {
    off: usize,
    cc: usize,
    lo: f64,
    k_ratio: f64,
    k_mind: f64,
    k_cols: usize,
}

struct Tree<'a> {
    fp: &'a FastPath,
    prune: bool,
    max_free: usize,
    boards: Vec<Board>,
    aliased: Vec<u64>,
    no_df: Vec<u64>,
    evaluated: u64,
    pruned: u64,
    beyond_max: u64,
    resolved: f64,
    total: f64,
    arena: Vec<Vec<f64>>,
    kids: Vec<Vec<Kid>>,
    ratios: Vec<Vec<(f64, f64, usize)>>,
    tmp: Vec<f64>,
    next_report: u64,
    progress: Option<&'a (dyn Fn(f64) + Sync)>,
    cancel: Option<&'a AtomicBool>,
    cancelled: bool,
}

/// Binomial coefficient as a float (sizes here stay far below overflow).
fn binom(n: usize, k: usize) -> f64 {
    let k = k.min(n - k);
    (0..k).fold(1.0, |acc, i| acc * (n - i) as f64 / (i + 1) as f64)
}

impl Tree<'_> {
    /// Records one computed model and returns its lower bound `RSS − e`.
    #[inline]
    fn offer(&mut self, free: usize, cols: usize, mask: u64, rss: f64, ratio: f64, mind: f64) -> f64 {
        self.evaluated += 1;
        self.resolved += 1.0;
        let params = self.fp.base_params + cols;
        let e = self.fp.error_estimate(rss, params, mind);
        if self.evaluated >= self.next_report {
            self.next_report = self.evaluated + (1 << 16);
            self.report();
        }
        if ratio <= 1.0 {
            self.aliased[free] += 1;
            return rss - e;
        }
        if free > self.max_free {
            return rss - e;
        }
        if params == 0 {
            return rss - e;
        }
        if params >= self.fp.n {
            self.no_df[free] += 1;
            return rss - e;
        }
        self.boards[free].offer(mask, rss, e);
        rss - e
    }

    fn report(&mut self) {
        if let Some(f) = self.progress {
            f((self.resolved / self.total).min(1.0));
        }
        if let Some(c) = self.cancel
            && c.load(Ordering::Relaxed)
        {
            self.cancelled = true;
        }
    }

    /// Visits a node whose largest model has already been offered.
    #[allow(clippy::too_many_arguments)]
    fn visit(
        &mut self,
        depth: usize,
        r: &[f64],
        c: usize,
        free: &[usize],
        k_count: usize,
        k_cols: usize,
        k_ratio: f64,
        k_mind: f64,
        l_mask: u64,
    ) {
        if self.cancelled {
            return;
        }
        let fp = self.fp;
        let m = free.len();
        // Diagonal ratios of the node's columns, and their prefix minima.
        let mut rat = std::mem::take(&mut self.ratios[depth]);
        rat.clear();
        // (ratio, diag, root column) per node column.
        for &q in free {
            for i in 0..fp.widths[q] {
                let col = fp.col_off[q] + i;
                let j = rat.len();
                rat.push((r[j * c + j].abs() / fp.col_tol[col], r[j * c + j].abs(), col));
            }
        }
        let mut buf = std::mem::take(&mut self.arena[depth]);
        let mut kids = std::mem::take(&mut self.kids[depth]);
        buf.clear();
        kids.clear();
        let mut tmp = std::mem::take(&mut self.tmp);
        let mut start = 0;
        let mut pre_ratio = k_ratio;
        let mut pre_mind = k_mind;
        for &q in free {
            let w = fp.widths[q];
            let cc = c - start - w;
            let off = buf.len();
            buf.resize(off + cc * cc, 0.0);
            drop_block(r, c, start, w, &mut tmp, &mut buf[off..off + cc * cc]);
            let out = &buf[off..off + cc * cc];
            let mut ratio = pre_ratio;
            let mut mind = pre_mind;
            for i in 0..cc - 1 {
                let d = out[i * cc + i].abs();
                let tol = fp.col_tol[rat[start + w + i].2];
                ratio = ratio.min(d / tol);
                if d > tol {
                    mind = mind.min(d);
                }
            }
            let rss = out[cc * cc - 1].powi(2);
            let mask = l_mask & !(1u64 << q);
            let lo = self.offer(k_count + m - 1, k_cols + c - 1 - w, mask, rss, ratio, mind);
            kids.push(Kid { off, cc, lo, k_ratio: pre_ratio, k_mind: pre_mind, k_cols: k_cols + start });
            for &(rt, d, _) in &rat[start..start + w] {
                pre_ratio = pre_ratio.min(rt);
                if rt > 1.0 {
                    pre_mind = pre_mind.min(d);
                }
            }
            start += w;
        }
        self.tmp = tmp;
        // Children in reverse order: the small subtrees, which keep the strongest terms, first.
        let mut sorted: Vec<f64> = Vec::with_capacity(m);
        for t in (0..m).rev() {
            if self.cancelled {
                break;
            }
            let kid = kids[t];
            let free_t = m - t - 1;
            if free_t >= 1 {
                let smin = k_count + t;
                let smax = k_count + m - 2;
                let sub = free_t as f64;
                if kid.k_ratio <= 1.0 {
                    // Every model in the subtree contains an aliased kept set.
                    for j in 0..free_t {
                        self.aliased[smin + j] += binom(free_t, j) as u64;
                    }
                    self.resolved += sub.exp2() - 1.0;
                } else if smin > self.max_free {
                    self.beyond_max += (sub.exp2() - 1.0) as u64;
                    self.resolved += sub.exp2() - 1.0;
                } else {
                    let live = !self.prune
                        || (smin..=smax.min(self.max_free)).any(|s| {
                            let d = k_count + m - 1 - s;
                            let bound = kid.lo.max(sorted[d - 1]);
                            bound <= self.boards[s].threshold()
                        });
                    if live {
                        let child = &buf[kid.off..kid.off + kid.cc * kid.cc];
                        let mask = l_mask & !(1u64 << free[t]);
                        self.visit(
                            depth + 1,
                            child,
                            kid.cc,
                            &free[t + 1..],
                            k_count + t,
                            kid.k_cols,
                            kid.k_ratio,
                            kid.k_mind,
                            mask,
                        );
                    } else {
                        self.pruned += (sub.exp2() - 1.0) as u64;
                        self.resolved += sub.exp2() - 1.0;
                    }
                }
            }
            let pos = sorted.partition_point(|&v| v <= kid.lo);
            sorted.insert(pos, kid.lo);
        }
        self.arena[depth] = buf;
        self.kids[depth] = kids;
        self.ratios[depth] = rat;
    }
}

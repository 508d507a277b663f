//! Repeated, seeded k-fold cross-validation, optionally with grouped folds, with errors measured
//! on the original response scale (Duan smearing for a transformed response), and
//! leave-one-out error through PRESS.
//!
//! # Folds
//! A ChaCha8 generator seeded with the given seed draws every repeat in turn. Without groups the
//! rows are shuffled (Fisher–Yates, each draw uniform by Lemire's unbiased multiply-and-reject on
//! 64-bit outputs) and the row at shuffled position `i` goes to fold `i mod k`, so fold sizes
//! differ by at most one. With a grouping column the distinct groups (in order of first
//! appearance) are shuffled the same way and each goes, in turn, to the fold that holds the
//! fewest rows so far (ties to the lowest fold number), so a group is never split between
//! training and test rows (Roberts et al. 2017). The same folds serve every model, so the models'
//! errors are paired. The assignment of every row is returned so that a run can be checked or
//! repeated.

use std::sync::atomic::{AtomicBool, Ordering};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use super::candidates::Candidates;
use super::qrfit::Factored;
use super::subsets::SubsetModel;
use crate::error::{EngineError, Result};
use crate::linalg::QrOptions;
use crate::spec::Transform;

/// A grouping of the rows for grouped folds.
#[derive(Debug, Clone, PartialEq)]
pub struct GroupColumn {
    /// The column's label, used in messages.
    pub label: String,
    /// The group of each row, in the row order of the candidates.
    pub values: Vec<String>,
}

/// Options of [`cross_validate`].
#[derive(Clone)]
pub struct CvOptions<'a> {
    /// Number of folds `k` (at least 2).
    pub folds: usize,
    /// Number of repeats `r` (at least 1), each with fresh folds.
    pub repeats: usize,
    /// Seed of the fold generator.
    pub seed: u64,
    /// Grouped folds: whole groups are held out together.
    pub groups: Option<GroupColumn>,
    /// The transform the modelled response went through; errors are then measured after
    /// transforming predictions back to the original scale with Duan's smearing estimate.
    pub response_transform: Option<Transform>,
    /// QR options of the training fits.
    pub qr: QrOptions,
    /// Called with the fraction of training fits done.
    pub progress: Option<&'a (dyn Fn(f64) + Sync)>,
    /// When this flag becomes true the run stops with [`EngineError::Cancelled`].
    pub cancel: Option<&'a AtomicBool>,
}

impl Default for CvOptions<'_> {
    fn default() -> Self {
        CvOptions {
            folds: 10,
            repeats: 5,
            seed: 20_240_601,
            groups: None,
            response_transform: None,
            qr: QrOptions::default(),
            progress: None,
            cancel: None,
        }
    }
}

impl std::fmt::Debug for CvOptions<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("CvOptions")
            .field("folds", &self.folds)
            .field("repeats", &self.repeats)
            .field("seed", &self.seed)
            .field("groups", &self.groups.as_ref().map(|g| &g.label))
            .field("response_transform", &self.response_transform)
            .finish_non_exhaustive()
    }
}

/// The folds of one repeat.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FoldAssignment {
    pub(crate) repeat: usize,
    pub(crate) fold_of_row: Vec<usize>,
}

impl FoldAssignment {
    /// The repeat number, from 0.
    pub fn repeat(&self) -> usize {
        self.repeat
    }
    /// The fold (from 0) that holds each row as a test row, in row order.
    pub fn fold_of_row(&self) -> &[usize] {
        &self.fold_of_row
    }
}

/// Mean, standard deviation (n − 1 denominator; 0 for one repeat), minimum and maximum of a
/// statistic across repeats.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Spread {
    /// Mean across repeats.
    pub mean: f64,
    /// Standard deviation across repeats.
    pub sd: f64,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
}

impl Spread {
    fn of(v: &[f64]) -> Spread {
        let n = v.len() as f64;
        let mean = v.iter().sum::<f64>() / n;
        let sd = if v.len() > 1 {
            (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
        } else {
            0.0
        };
        Spread {
            mean,
            sd,
            min: v.iter().copied().fold(f64::INFINITY, f64::min),
            max: v.iter().copied().fold(f64::NEG_INFINITY, f64::max),
        }
    }
}

/// Cross-validated errors of one model.
#[derive(Debug, Clone, PartialEq)]
pub struct CvModel {
    pub(crate) terms: Vec<usize>,
    pub(crate) labels: Vec<String>,
    pub(crate) rmse: Vec<f64>,
    pub(crate) mae: Vec<f64>,
    pub(crate) r2: Vec<f64>,
    pub(crate) rank_deficient_fits: usize,
    pub(crate) undefined_predictions: usize,
}

impl CvModel {
    /// The model's terms.
    pub fn terms(&self) -> &[usize] {
        &self.terms
    }
    /// Their labels.
    pub fn labels(&self) -> &[String] {
        &self.labels
    }
    /// Root mean squared prediction error of each repeat (original scale).
    pub fn rmse_by_repeat(&self) -> &[f64] {
        &self.rmse
    }
    /// Mean absolute prediction error of each repeat (original scale).
    pub fn mae_by_repeat(&self) -> &[f64] {
        &self.mae
    }
    /// Out-of-sample R² of each repeat: `1 − Σw(y − ŷ)² / Σw(y − ȳ_train)²`.
    pub fn r2_by_repeat(&self) -> &[f64] {
        &self.r2
    }
    /// RMSE across repeats.
    pub fn rmse(&self) -> Spread {
        Spread::of(&self.rmse)
    }
    /// MAE across repeats.
    pub fn mae(&self) -> Spread {
        Spread::of(&self.mae)
    }
    /// Out-of-sample R² across repeats.
    pub fn r2(&self) -> Spread {
        Spread::of(&self.r2)
    }
    /// Training fits in which the model was rank deficient (for example a category absent from
    /// the training rows); the aliased coefficients were set to zero there.
    pub fn rank_deficient_fits(&self) -> usize {
        self.rank_deficient_fits
    }
    /// Test predictions that could not be transformed back to the original scale and were left
    /// out of the errors.
    pub fn undefined_predictions(&self) -> usize {
        self.undefined_predictions
    }
}

/// The outcome of [`cross_validate`].
#[derive(Debug, Clone, PartialEq)]
pub struct CvResult {
    pub(crate) folds: usize,
    pub(crate) repeats: usize,
    pub(crate) seed: u64,
    pub(crate) group_label: Option<String>,
    pub(crate) assignments: Vec<FoldAssignment>,
    pub(crate) models: Vec<CvModel>,
    pub(crate) weighted: bool,
    pub(crate) notes: Vec<String>,
}

impl CvResult {
    /// Number of folds.
    pub fn folds(&self) -> usize {
        self.folds
    }
    /// Number of repeats.
    pub fn repeats(&self) -> usize {
        self.repeats
    }
    /// The seed.
    pub fn seed(&self) -> u64 {
        self.seed
    }
    /// The grouping column, for grouped folds.
    pub fn group_label(&self) -> Option<&str> {
        self.group_label.as_deref()
    }
    /// The folds of every repeat.
    pub fn assignments(&self) -> &[FoldAssignment] {
        &self.assignments
    }
    /// Errors of each model, in the order given.
    pub fn models(&self) -> &[CvModel] {
        &self.models
    }
    /// Whether errors are weighted by the case weights.
    pub fn weighted(&self) -> bool {
        self.weighted
    }
    /// Plain-language notes on how the errors were measured.
    pub fn notes(&self) -> &[String] {
        &self.notes
    }
}

/// Leave-one-out root mean squared prediction error from PRESS (Allen 1974):
/// `√(PRESS / Σw)`, on the modelled response's scale. `None` when PRESS is undefined.
pub fn loo_rmse(model: &SubsetModel, weight_sum: f64) -> Option<f64> {
    model.loo_rmse(weight_sum)
}

/// A uniform integer in `0..bound` (Lemire 2019, "Fast random integer generation in an
/// interval", ACM TOMACS 29(1)).
fn below(rng: &mut ChaCha8Rng, bound: u64) -> u64 {
    let mut m = u128::from(rng.next_u64()) * u128::from(bound);
    let mut l = m as u64;
    if l < bound {
        let t = bound.wrapping_neg() % bound;
        while l < t {
            m = u128::from(rng.next_u64()) * u128::from(bound);
            l = m as u64;
        }
    }
    (m >> 64) as u64
}

fn shuffle<T>(v: &mut [T], rng: &mut ChaCha8Rng) {
    for i in (1..v.len()).rev() {
        let j = below(rng, i as u64 + 1) as usize;
        v.swap(i, j);
    }
}

/// Draws the folds of every repeat (see the module notes).
///
/// # Errors
/// [`EngineError::BadSearchOption`] for fewer than 2 folds, more folds than rows, or no repeat;
/// [`EngineError::TooFewGroups`] when there are fewer groups than folds;
/// [`EngineError::DimensionMismatch`] when the group column has the wrong length.
pub fn make_folds(n: usize, opts: &CvOptions<'_>) -> Result<Vec<FoldAssignment>> {
    let k = opts.folds;
    if k < 2 {
        return Err(bad("folds", "at least 2 folds are needed"));
    }
    if opts.repeats == 0 {
        return Err(bad("repeats", "at least one repeat is needed"));
    }
    let mut rng = ChaCha8Rng::seed_from_u64(opts.seed);
    let mut out = Vec::with_capacity(opts.repeats);
    match &opts.groups {
        None => {
            if k > n {
                return Err(bad("folds", &format!("{k} folds cannot be made from {n} rows")));
            }
            for repeat in 0..opts.repeats {
                let mut perm: Vec<usize> = (0..n).collect();
                shuffle(&mut perm, &mut rng);
                let mut fold_of_row = vec![0; n];
                for (pos, &i) in perm.iter().enumerate() {
                    fold_of_row[i] = pos % k;
                }
                out.push(FoldAssignment { repeat, fold_of_row });
            }
        }
        Some(g) => {
            if g.values.len() != n {
                return Err(EngineError::DimensionMismatch {
                    what: format!("values of the grouping column {}", g.label),
                    expected: n,
                    found: g.values.len(),
                });
            }
            let mut index = std::collections::HashMap::new();
            let mut group_of_row = Vec::with_capacity(n);
            let mut sizes: Vec<usize> = Vec::new();
            for v in &g.values {
                let next = index.len();
                let gi = *index.entry(v.as_str()).or_insert(next);
                if gi == sizes.len() {
                    sizes.push(0);
                }
                sizes[gi] += 1;
                group_of_row.push(gi);
            }
            if sizes.len() < k {
                return Err(EngineError::TooFewGroups {
                    column: g.label.clone(),
                    groups: sizes.len(),
                    folds: k,
                });
            }
            for repeat in 0..opts.repeats {
                let mut order: Vec<usize> = (0..sizes.len()).collect();
                shuffle(&mut order, &mut rng);
                let mut load = vec![0usize; k];
                let mut fold_of_group = vec![0; sizes.len()];
                for &gi in &order {
                    let f = (0..k).min_by_key(|&f| (load[f], f)).unwrap_or(0);
                    load[f] += sizes[gi];
                    fold_of_group[gi] = f;
                }
                let fold_of_row = group_of_row.iter().map(|&gi| fold_of_group[gi]).collect();
                out.push(FoldAssignment { repeat, fold_of_row });
            }
        }
    }
    Ok(out)
}

fn bad(option: &str, reason: &str) -> EngineError {
    EngineError::BadSearchOption { option: option.to_owned(), reason: reason.to_owned() }
}

/// The inverse of a response transform, `None` outside its range.
pub(crate) fn inverse(t: Transform, v: f64) -> Option<f64> {
    let out = match t {
        Transform::Log => v.exp(),
        Transform::Power(0.0) => v.exp(),
        Transform::Reciprocal => {
            if v == 0.0 {
                return None;
            }
            1.0 / v
        }
        Transform::Sqrt => {
            if v < 0.0 {
                return None;
            }
            v * v
        }
        Transform::Square => {
            if v < 0.0 {
                return None;
            }
            v.sqrt()
        }
        Transform::Power(l) => {
            if v >= 0.0 {
                v.powf(1.0 / l)
            } else if l.fract() == 0.0 && (l as i64) % 2 != 0 {
                -(-v).powf(1.0 / l)
            } else {
                return None;
            }
        }
    };
    out.is_finite().then_some(out)
}

/// Duan's (1983) smearing estimate of `E[y]` on the original scale: the mean of
/// `g⁻¹(η̂ + eⱼ)` over the training residuals `eⱼ`. Closed forms for the logarithm
/// (`exp(η̂)·mean(exp eⱼ)`) and the square root (`η̂² + 2η̂ē + mean(e²)`, the inverse being the
/// square). Terms outside the inverse's range are left out; `None` when none remains.
struct Smearer {
    t: Transform,
    resid: Vec<f64>,
    mean_exp: f64,
    mean_e: f64,
    mean_e2: f64,
}

impl Smearer {
    fn new(t: Transform, resid: Vec<f64>) -> Smearer {
        let t = match t {
            Transform::Power(0.0) => Transform::Log,
            t => t,
        };
        let n = resid.len() as f64;
        let (mean_exp, mean_e, mean_e2) = match t {
            Transform::Log => (resid.iter().map(|e| e.exp()).sum::<f64>() / n, 0.0, 0.0),
            Transform::Sqrt => {
                (0.0, resid.iter().sum::<f64>() / n, resid.iter().map(|e| e * e).sum::<f64>() / n)
            }
            _ => (0.0, 0.0, 0.0),
        };
        Smearer { t, resid, mean_exp, mean_e, mean_e2 }
    }

    fn predict(&self, eta: f64) -> Option<f64> {
        let v = match self.t {
            Transform::Log => eta.exp() * self.mean_exp,
            Transform::Sqrt => eta * eta + 2.0 * eta * self.mean_e + self.mean_e2,
            t => {
                let mut s = 0.0;
                let mut k = 0usize;
                for e in &self.resid {
                    if let Some(v) = inverse(t, eta + e) {
                        s += v;
                        k += 1;
                    }
                }
                if k == 0 {
                    return None;
                }
                s / k as f64
            }
        };
        v.is_finite().then_some(v)
    }
}

/// Cross-validates each model (a list of term indices; forced terms must be listed) on the same
/// repeated folds and returns RMSE, MAE and out-of-sample R² on the original scale.
///
/// # Errors
/// As [`make_folds`]; [`EngineError::BadSearchOption`] when a training set has no more rows than
/// a model has coefficients, or the original response cannot be recovered from the transform;
/// [`EngineError::Cancelled`] when the cancel flag is raised.
pub fn cross_validate(cands: &Candidates, models: &[Vec<usize>], opts: &CvOptions<'_>) -> Result<CvResult> {
    let n = cands.nrows();
    let assignments = make_folds(n, opts)?;
    let k = opts.folds;
    let w = cands.weights();
    let wt = |i: usize| w.map_or(1.0, |w| w[i]);
    let y_model = cands.y();
    let y_orig: Vec<f64> = match opts.response_transform {
        None => y_model.to_vec(),
        Some(t) => y_model.iter().map(|&v| inverse(t, v)).collect::<Option<Vec<f64>>>().ok_or_else(|| {
            bad("response transform", "the original response cannot be recovered from the transformed values")
        })?,
    };
    let mut union: Vec<usize> = models.iter().flatten().copied().collect();
    union.sort_unstable();
    union.dedup();
    if let Some(&t) = union.iter().find(|&&t| t >= cands.terms().len()) {
        return Err(bad(
            "models",
            &format!("there is no candidate number {t}; there are {}", cands.terms().len()),
        ));
    }
    let max_params = models.iter().map(|m| cands.params_of(m)).max().unwrap_or(0);
    let mut out: Vec<CvModel> = models
        .iter()
        .map(|m| CvModel {
            terms: m.clone(),
            labels: cands.labels(m),
            rmse: Vec::with_capacity(opts.repeats),
            mae: Vec::with_capacity(opts.repeats),
            r2: Vec::with_capacity(opts.repeats),
            rank_deficient_fits: 0,
            undefined_predictions: 0,
        })
        .collect();
    let total = (opts.repeats * k * models.len()).max(1) as f64;
    let mut done = 0.0;
    for a in &assignments {
        let mut sse = vec![0.0; models.len()];
        let mut sae = vec![0.0; models.len()];
        let mut sst = vec![0.0; models.len()];
        let mut wsum = vec![0.0; models.len()];
        for f in 0..k {
            let train: Vec<usize> = (0..n).filter(|&i| a.fold_of_row[i] != f).collect();
            let test: Vec<usize> = (0..n).filter(|&i| a.fold_of_row[i] == f).collect();
            if test.is_empty() {
                continue;
            }
            if train.len() <= max_params {
                return Err(bad(
                    "folds",
                    &format!(
                        "a training set of repeat {} has {} rows, not more than the {max_params} coefficients of the largest \
                         model; use fewer folds",
                        a.repeat + 1,
                        train.len()
                    ),
                ));
            }
            let tw: f64 = train.iter().map(|&i| wt(i)).sum();
            let train_mean = train.iter().map(|&i| wt(i) * y_orig[i]).sum::<f64>() / tw;
            let fac = Factored::new(cands, &union, Some(&train));
            for (mi, terms) in models.iter().enumerate() {
                if let Some(c) = opts.cancel
                    && c.load(Ordering::Relaxed)
                {
                    return Err(EngineError::Cancelled);
                }
                let (beta, resid, deficient) = train_fit(cands, &fac, terms, &opts.qr);
                if deficient {
                    out[mi].rank_deficient_fits += 1;
                }
                let xt = cands.model_matrix(terms, Some(&test));
                let eta = xt.mul_vec(&beta);
                let smear = opts.response_transform.map(|t| Smearer::new(t, resid));
                for (&i, &e) in test.iter().zip(&eta) {
                    let pred = match &smear {
                        None => Some(e),
                        Some(s) => s.predict(e),
                    };
                    let Some(pred) = pred else {
                        out[mi].undefined_predictions += 1;
                        continue;
                    };
                    let wi = wt(i);
                    let err = y_orig[i] - pred;
                    sse[mi] += wi * err * err;
                    sae[mi] += wi * err.abs();
                    sst[mi] += wi * (y_orig[i] - train_mean).powi(2);
                    wsum[mi] += wi;
                }
                done += 1.0;
                if let Some(p) = opts.progress {
                    p(done / total);
                }
            }
        }
        for mi in 0..models.len() {
            let ws = wsum[mi].max(f64::MIN_POSITIVE);
            out[mi].rmse.push((sse[mi] / ws).sqrt());
            out[mi].mae.push(sae[mi] / ws);
            out[mi].r2.push(if sst[mi] > 0.0 { 1.0 - sse[mi] / sst[mi] } else { 0.0 });
        }
    }
    let mut notes = Vec::new();
    if let Some(t) = opts.response_transform {
        notes.push(format!(
            "The model is fitted to {} of the response; predictions are transformed back with Duan's smearing \
             estimate and errors are measured on the original scale, so they compare across response transforms.",
            t.label("y")
        ));
    }
    if w.is_some() {
        notes.push("Errors are weighted by the case weights, as in the fit.".to_owned());
    }
    if let Some(g) = &opts.groups {
        notes.push(format!(
            "Folds hold out whole groups of {}, so rows of one group are never split between training and test.",
            g.label
        ));
    }
    Ok(CvResult {
        folds: k,
        repeats: opts.repeats,
        seed: opts.seed,
        group_label: opts.groups.as_ref().map(|g| g.label.clone()),
        assignments,
        models: out,
        weighted: w.is_some(),
        notes,
    })
}

/// Fits a model on the training rows: coefficients in model-matrix order (aliased columns get
/// zero, as in the core's QR), raw training residuals, and whether the fit was rank deficient.
fn train_fit(
    cands: &Candidates,
    fac: &Factored,
    terms: &[usize],
    qr: &QrOptions,
) -> (Vec<f64>, Vec<f64>, bool) {
    let all = fac.model_positions(cands, terms);
    let mut keep: Vec<usize> = (0..all.len()).collect();
    let mut deficient = false;
    let factor = loop {
        let mp: Vec<usize> = keep.iter().map(|&j| all[j]).collect();
        match fac.factor_model(&mp, qr) {
            Ok(f) => break Some((mp, f)),
            Err(pos) => {
                deficient = true;
                keep.remove(pos);
                if keep.is_empty() {
                    break None;
                }
            }
        }
    };
    let sw = fac.sqrt_weights();
    let mut beta = vec![0.0; all.len()];
    match factor {
        Some((mp, f)) => {
            let (s, _) = fac.solve(&mp, &f);
            for (b, &j) in s.beta.iter().zip(&keep) {
                beta[j] = *b;
            }
            let resid = s.residuals.iter().zip(sw).map(|(r, s)| r / s).collect();
            (beta, resid, deficient)
        }
        None => (beta, Vec::new(), deficient),
    }
}

//! Exact best subsets: the best `m` models of every size by residual sum of squares, each refitted
//! by pivoted QR and described by SSE, R², adjusted R², Mallows' Cp, AIC, SBC and PRESS.
//!
//! The fast path ([`super::fastpath`]) narrows the field; the pivoted-QR refit of every model in
//! each size's pool decides the ranking and supplies every reported number.

use std::sync::atomic::AtomicBool;

use super::candidates::{Candidates, Refit};
use super::fastpath::{FastPath, FastSettings};
use super::qrfit::Factored;
use crate::error::{EngineError, Result};
use crate::linalg::QrOptions;

/// How the subsets are enumerated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum SearchMethod {
    /// Exhaustive up to [`EXHAUSTIVE_LIMIT`] free candidates, leaps and bounds beyond.
    #[default]
    Auto,
    /// Every subset is computed.
    Exhaustive,
    /// Furnival–Wilson leaps and bounds: subtrees that cannot hold a top model are skipped.
    LeapsAndBounds,
}

/// The largest number of free candidates that [`SearchMethod::Auto`] enumerates exhaustively.
pub const EXHAUSTIVE_LIMIT: usize = 20;

/// The most free candidates a search accepts (one bit per candidate in a 63-bit set).
pub const MAX_CANDIDATES: usize = 63;

/// Which statistics a search computes for the models it reports.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Statistics {
    /// Every statistic, from a refit of each reported model on the data (residuals in
    /// compensated arithmetic, leverages for PRESS).
    #[default]
    Full,
    /// The ranking and the SSE-based statistics only, read off each model's QR factor; PRESS is
    /// not computed. Meant for timing the ranking itself.
    RankingOnly,
}

/// Options of [`best_subsets`].
#[derive(Clone)]
pub struct SearchOptions<'a> {
    /// How many models to report per size (at least 1).
    pub top: usize,
    /// The largest model size (terms, forced ones included) to report; all sizes when `None`.
    pub max_size: Option<usize>,
    /// Candidate terms (indices into [`Candidates::terms`]) that every model contains.
    pub forced: Vec<usize>,
    /// The enumeration.
    pub method: SearchMethod,
    /// The QR options of the refits; its rank tolerance also decides aliasing in the fast path.
    pub qr: QrOptions,
    /// The statistics computed for the reported models.
    pub statistics: Statistics,
    /// Called now and then with the fraction of subsets dealt with, from 0 to 1.
    pub progress: Option<&'a (dyn Fn(f64) + Sync)>,
    /// When this flag becomes true the search stops with [`EngineError::Cancelled`].
    pub cancel: Option<&'a AtomicBool>,
}

impl Default for SearchOptions<'_> {
    fn default() -> Self {
        SearchOptions {
            top: 5,
            max_size: None,
            forced: Vec::new(),
            method: SearchMethod::Auto,
            qr: QrOptions::default(),
            statistics: Statistics::Full,
            progress: None,
            cancel: None,
        }
    }
}

impl std::fmt::Debug for SearchOptions<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SearchOptions")
            .field("top", &self.top)
            .field("max_size", &self.max_size)
            .field("forced", &self.forced)
            .field("method", &self.method)
            .field("qr", &self.qr)
            .field("statistics", &self.statistics)
            .field("progress", &self.progress.is_some())
            .field("cancel", &self.cancel.is_some())
            .finish()
    }
}

/// One reported model, with statistics from its pivoted-QR refit.
#[derive(Debug, Clone, PartialEq)]
pub struct SubsetModel {
    pub(crate) terms: Vec<usize>,
    pub(crate) labels: Vec<String>,
    pub(crate) size: usize,
    pub(crate) rank_in_size: usize,
    pub(crate) params: usize,
    pub(crate) nobs: usize,
    pub(crate) sse: f64,
    pub(crate) r_squared: f64,
    pub(crate) adj_r_squared: f64,
    pub(crate) cp: Option<f64>,
    pub(crate) aic: Option<f64>,
    pub(crate) sbc: Option<f64>,
    pub(crate) press: Option<f64>,
    pub(crate) press_note: Option<String>,
}

impl SubsetModel {
    /// The model's terms (indices into [`Candidates::terms`]), in design order.
    pub fn terms(&self) -> &[usize] {
        &self.terms
    }
    /// The labels of the model's terms.
    pub fn labels(&self) -> &[String] {
        &self.labels
    }
    /// Number of terms (forced ones included, intercept not counted).
    pub fn size(&self) -> usize {
        self.size
    }
    /// Position within its size, 1 for the smallest SSE.
    pub fn rank_in_size(&self) -> usize {
        self.rank_in_size
    }
    /// Number of regression coefficients, intercept included.
    pub fn params(&self) -> usize {
        self.params
    }
    /// Residual degrees of freedom.
    pub fn df_resid(&self) -> usize {
        self.nobs - self.params
    }
    /// Residual (weighted) sum of squares.
    pub fn sse(&self) -> f64 {
        self.sse
    }
    /// R².
    pub fn r_squared(&self) -> f64 {
        self.r_squared
    }
    /// Adjusted R².
    pub fn adj_r_squared(&self) -> f64 {
        self.adj_r_squared
    }
    /// Mallows' Cp; `None` when no full-rank reference model with residual degrees of freedom
    /// exists (see [`SubsetSearch::cp_reference`]).
    pub fn cp(&self) -> Option<f64> {
        self.cp
    }
    /// AIC = −2ℓ + 2p; `None` for an exact fit (SSE = 0), where ℓ is unbounded.
    pub fn aic(&self) -> Option<f64> {
        self.aic
    }
    /// SBC (BIC) = −2ℓ + p ln n; `None` for an exact fit.
    pub fn sbc(&self) -> Option<f64> {
        self.sbc
    }
    /// PRESS = Σ wᵢ (eᵢ / (1 − hᵢ))²; `None` when a leverage equals 1 (see [`Self::press_note`])
    /// or when the search computed the ranking only.
    pub fn press(&self) -> Option<f64> {
        self.press
    }
    /// Why PRESS is undefined, when it is.
    pub fn press_note(&self) -> Option<&str> {
        self.press_note.as_deref()
    }
    /// Leave-one-out root mean squared prediction error, `√(PRESS / Σw)` (`√(PRESS/n)` unweighted).
    pub fn loo_rmse(&self, weight_sum: f64) -> Option<f64> {
        self.press.map(|p| (p / weight_sum).sqrt())
    }
}

/// A model near the top of its size that the fast path took as estimable but the QR refit found
/// aliased; it is reported as aliased and never ranked.
#[derive(Debug, Clone, PartialEq)]
pub struct AliasedModel {
    pub(crate) labels: Vec<String>,
    pub(crate) message: String,
}

impl AliasedModel {
    /// The model's term labels.
    pub fn labels(&self) -> &[String] {
        &self.labels
    }
    /// The aliasing, in words.
    pub fn message(&self) -> &str {
        &self.message
    }
}

/// The best models of one size.
#[derive(Debug, Clone, PartialEq)]
pub struct SizeBest {
    pub(crate) size: usize,
    pub(crate) models: Vec<SubsetModel>,
    pub(crate) aliased: u64,
    pub(crate) aliased_on_refit: Vec<AliasedModel>,
    pub(crate) no_df: u64,
}

impl SizeBest {
    /// Number of terms, forced ones included.
    pub fn size(&self) -> usize {
        self.size
    }
    /// The best models, smallest SSE first.
    pub fn models(&self) -> &[SubsetModel] {
        &self.models
    }
    /// How many models of this size the search met that are aliased (a column is a linear
    /// combination of others); they are never ranked.
    pub fn aliased(&self) -> u64 {
        self.aliased
    }
    /// Models the refit found aliased although the fast path did not.
    pub fn aliased_on_refit(&self) -> &[AliasedModel] {
        &self.aliased_on_refit
    }
    /// Models of this size with as many coefficients as rows (no residual degrees of freedom).
    pub fn no_residual_df(&self) -> u64 {
        self.no_df
    }
}

/// The model whose mean squared error scales Mallows' Cp.
#[derive(Debug, Clone, PartialEq)]
pub struct CpReference {
    pub(crate) labels: Vec<String>,
    pub(crate) left_out: Vec<String>,
    pub(crate) mse: Option<f64>,
    pub(crate) df_resid: usize,
    pub(crate) note: Option<String>,
}

impl CpReference {
    /// Terms of the reference model.
    pub fn labels(&self) -> &[String] {
        &self.labels
    }
    /// Terms of the full model left out to reach full rank.
    pub fn left_out(&self) -> &[String] {
        &self.left_out
    }
    /// The reference mean squared error σ̂², when it exists.
    pub fn mse(&self) -> Option<f64> {
        self.mse
    }
    /// Its residual degrees of freedom.
    pub fn df_resid(&self) -> usize {
        self.df_resid
    }
    /// The explanation when the reference is not the full model.
    pub fn note(&self) -> Option<&str> {
        self.note.as_deref()
    }
}

/// Counts that show how much work the search did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SearchCounts {
    /// All subsets of the free candidates, `2^k`.
    pub subsets: u64,
    /// Subsets whose RSS the fast path computed.
    pub evaluated: u64,
    /// Subsets skipped because a bound proved they cannot be among the best.
    pub pruned: u64,
    /// Subsets above the maximum size that were not computed.
    pub beyond_max_size: u64,
    /// Aliased subsets met (all sizes).
    pub aliased: u64,
    /// Pivoted-QR refits made to settle the ranking and the statistics.
    pub refits: usize,
}

/// The outcome of [`best_subsets`].
#[derive(Debug, Clone, PartialEq)]
pub struct SubsetSearch {
    pub(crate) method: SearchMethod,
    pub(crate) candidates: Vec<String>,
    pub(crate) forced: Vec<String>,
    pub(crate) nobs: usize,
    pub(crate) weight_sum: f64,
    pub(crate) sizes: Vec<SizeBest>,
    pub(crate) cp_reference: CpReference,
    pub(crate) counts: SearchCounts,
    pub(crate) notes: Vec<String>,
}

impl SubsetSearch {
    /// The enumeration used ([`SearchMethod::Exhaustive`] or [`SearchMethod::LeapsAndBounds`]).
    pub fn method(&self) -> SearchMethod {
        self.method
    }
    /// Labels of every candidate term, forced ones included.
    pub fn candidates(&self) -> &[String] {
        &self.candidates
    }
    /// Labels of the forced terms.
    pub fn forced(&self) -> &[String] {
        &self.forced
    }
    /// Rows used.
    pub fn nobs(&self) -> usize {
        self.nobs
    }
    /// Sum of the case weights (the row count without weights).
    pub fn weight_sum(&self) -> f64 {
        self.weight_sum
    }
    /// The best models of each size, smallest size first.
    pub fn sizes(&self) -> &[SizeBest] {
        &self.sizes
    }
    /// Every reported model, size by size.
    pub fn models(&self) -> impl Iterator<Item = &SubsetModel> {
        self.sizes.iter().flat_map(|s| s.models.iter())
    }
    /// The model that scales Mallows' Cp.
    pub fn cp_reference(&self) -> &CpReference {
        &self.cp_reference
    }
    /// Work counts.
    pub fn counts(&self) -> SearchCounts {
        self.counts
    }
    /// Plain-language notes: optimistic p-values, comparing AIC/SBC across transforms, and any
    /// caveat met during the search.
    pub fn notes(&self) -> &[String] {
        &self.notes
    }
}

/// Note: p-values after a search are optimistic.
pub const NOTE_OPTIMISTIC_P: &str = "P-values of a model picked by this search are optimistic: the same data chose the \
predictors and then tested them, so the usual t and F tests overstate how sure we can be. Treat them as descriptive, \
and confirm a choice on new data or by cross-validation.";

/// Note: AIC and SBC are not comparable across response transforms.
pub const NOTE_AIC_SCALE: &str = "AIC and SBC compare models of the same response only. A model of log(rate) and a \
model of the rate are likelihoods of different variables (the transform's Jacobian is missing), so their AIC or SBC \
values cannot be set side by side. To choose between response transforms, compare cross-validated prediction error \
measured on the original scale.";

/// Finds the best `opts.top` models of every size by SSE, exactly, and refits each by pivoted QR.
///
/// # Errors
/// [`EngineError::BadSearchOption`] for a top of 0, an unknown or repeated forced term, or a
/// maximum size below the number of forced terms; [`EngineError::TooManyCandidates`] beyond
/// [`MAX_CANDIDATES`] free terms; [`EngineError::Aliased`] when the forced terms are collinear;
/// [`EngineError::ConstantResponse`] when the response does not vary; [`EngineError::Cancelled`]
/// when the cancel flag is raised.
pub fn best_subsets(cands: &Candidates, opts: &SearchOptions<'_>) -> Result<SubsetSearch> {
    let nterms = cands.terms().len();
    if opts.top == 0 {
        return Err(bad("top", "at least one model per size must be asked for"));
    }
    let mut forced = opts.forced.clone();
    forced.sort_unstable();
    for w in forced.windows(2) {
        if w[0] == w[1] {
            return Err(bad("forced", &format!("{} is forced in twice", cands.terms()[w[0]].label)));
        }
    }
    if let Some(&t) = forced.iter().find(|&&t| t >= nterms) {
        return Err(bad("forced", &format!("there is no candidate number {t}; there are {nterms}")));
    }
    let free: Vec<usize> = (0..nterms).filter(|t| forced.binary_search(t).is_err()).collect();
    if free.len() > MAX_CANDIDATES {
        return Err(EngineError::TooManyCandidates { count: free.len(), max: MAX_CANDIDATES });
    }
    let max_size = opts.max_size.unwrap_or(nterms).min(nterms);
    if max_size < forced.len() {
        return Err(bad(
            "max_size",
            &format!(
                "the largest size ({max_size}) is smaller than the number of forced terms ({})",
                forced.len()
            ),
        ));
    }
    if !forced.is_empty()
        && let Err(a) = cands.refit(&forced, None, &opts.qr, false)
    {
        return Err(EngineError::Aliased { column: a.column, combination: a.combination });
    }
    let method = match opts.method {
        SearchMethod::Auto if free.len() <= EXHAUSTIVE_LIMIT => SearchMethod::Exhaustive,
        SearchMethod::Auto => SearchMethod::LeapsAndBounds,
        m => m,
    };
    let fp = FastPath::new(cands, &forced, &free, opts.qr.rank_tolerance)?;
    let fast = fp.run(&FastSettings {
        top: opts.top,
        max_free: max_size - forced.len(),
        prune: method == SearchMethod::LeapsAndBounds,
        progress: opts.progress,
        cancel: opts.cancel,
    })?;
    let n = cands.nrows();
    let sst = cands.ssto();
    let weight_sum = cands.weights().map_or(n as f64, |w| w.iter().sum());
    let log_w = cands.log_weight_sum();
    let all_terms: Vec<usize> = (0..nterms).collect();
    let fac = Factored::new(cands, &all_terms, None);
    let cp_reference = cp_reference(cands, &fac, &forced, &free, &opts.qr);
    let mut refits = 0;
    let mut sizes = Vec::new();
    let mut notes = vec![NOTE_OPTIMISTIC_P.to_owned(), NOTE_AIC_SCALE.to_owned()];
    if let Some(note) = &cp_reference.note {
        notes.push(note.clone());
    }
    for (s, pool) in fast.pools.iter().enumerate() {
        if s + forced.len() > max_size {
            break;
        }
        let mut ranked: Vec<(f64, Vec<usize>)> = Vec::new();
        let mut aliased_on_refit = Vec::new();
        let tie = TIE_TOLERANCE * sst;
        let aliased = |terms: &[usize], pos: usize| {
            let a = cands.alias_explanation(terms, fac.rows(), pos);
            AliasedModel {
                labels: cands.labels(terms),
                message: EngineError::Aliased { column: a.column, combination: a.combination }.to_string(),
            }
        };
        for e in pool {
            if ranked.len() >= opts.top {
                let mut sses: Vec<f64> = ranked.iter().map(|r| r.0).collect();
                sses.sort_by(f64::total_cmp);
                if (e.rss - 2.0 * e.err) * sst > sses[opts.top - 1] + tie {
                    break;
                }
            }
            let mut terms: Vec<usize> = forced.clone();
            terms.extend((0..fast.order.len()).filter(|&q| e.mask >> q & 1 == 1).map(|q| fast.order[q]));
            terms.sort_unstable();
            refits += 1;
            match fac.factor_model(&fac.model_positions(cands, &terms), &opts.qr) {
                Ok(f) => ranked.push((f.sse, terms)),
                Err(pos) => aliased_on_refit.push(aliased(&terms, pos)),
            }
        }
        rank_with_ties(&mut ranked, tie, |r| (r.0, &r.1));
        ranked.truncate(opts.top);
        let size = s + forced.len();
        let mut models = Vec::with_capacity(ranked.len());
        for (sse, terms) in ranked {
            let refit = match opts.statistics {
                Statistics::Full => fac.refit(cands, &terms, &opts.qr, true),
                Statistics::RankingOnly => Ok(Refit {
                    sse,
                    params: cands.params_of(&terms),
                    weighted_residuals: Vec::new(),
                    leverages: None,
                }),
            };
            match refit {
                Ok(r) => models.push(describe(
                    cands,
                    terms,
                    size,
                    models.len() + 1,
                    &r,
                    sst,
                    log_w,
                    cp_reference.mse,
                )),
                Err(_) => aliased_on_refit.push(aliased(&terms, 0)),
            }
        }
        sizes.push(SizeBest {
            size,
            models,
            aliased: fast.aliased[s],
            aliased_on_refit,
            no_df: fast.no_df[s],
        });
    }
    for sb in &sizes {
        for m in &sb.models {
            if let Some(note) = &m.press_note {
                notes.push(format!("{} ({}): {note}", model_name(&m.labels), sb.size));
            }
        }
        if !sb.aliased_on_refit.is_empty() {
            notes.push(format!(
                "{} model(s) of size {} were found aliased by the refit and are not ranked; fewer than {} models may be \
                 listed for that size.",
                sb.aliased_on_refit.len(),
                sb.size,
                opts.top
            ));
        }
    }
    let aliased_total: u64 = fast.aliased.iter().sum();
    if aliased_total > 0 {
        notes.push(format!(
            "{aliased_total} subset(s) are aliased (a column is an exact linear combination of others, on the rank \
             tolerance {:e}); they are counted per size and never ranked.",
            opts.qr.rank_tolerance
        ));
    }
    let p = free.len();
    let counts = SearchCounts {
        subsets: if p >= 64 { u64::MAX } else { 1u64 << p },
        evaluated: fast.evaluated,
        pruned: fast.pruned,
        beyond_max_size: fast.beyond_max,
        aliased: aliased_total,
        refits,
    };
    Ok(SubsetSearch {
        method,
        candidates: cands.terms().iter().map(|t| t.label.clone()).collect(),
        forced: cands.labels(&forced),
        nobs: n,
        weight_sum,
        sizes,
        cp_reference,
        counts,
        notes,
    })
}

/// Models whose SSEs differ by at most this fraction of the total sum of squares are tied: they
/// span the same column space or differ only by rounding, and are ordered by their term lists.
pub const TIE_TOLERANCE: f64 = 1e-12;

/// Sorts by SSE, then orders each run of tied SSEs (each within `tie` of the run's first) by the
/// term list, so exact ties come out in the same order whatever their rounding.
pub fn rank_with_ties<T>(v: &mut [T], tie: f64, key: impl Fn(&T) -> (f64, &[usize])) {
    v.sort_by(|a, b| key(a).0.total_cmp(&key(b).0).then_with(|| key(a).1.cmp(key(b).1)));
    let mut start = 0;
    while start < v.len() {
        let first = key(&v[start]).0;
        let mut end = start + 1;
        while end < v.len() && key(&v[end]).0 - first <= tie {
            end += 1;
        }
        v[start..end].sort_by(|a, b| key(a).1.cmp(key(b).1));
        start = end;
    }
}

fn bad(option: &str, reason: &str) -> EngineError {
    EngineError::BadSearchOption { option: option.to_owned(), reason: reason.to_owned() }
}

/// A short name for a model: its labels joined, or "the intercept-only model".
pub(crate) fn model_name(labels: &[String]) -> String {
    if labels.is_empty() { "the intercept-only model".to_owned() } else { labels.join(" + ") }
}

/// Gaussian log-likelihood at the MLE of σ² (ENGINE_API convention, as in docs/METHODS.md).
pub(crate) fn log_likelihood(sse: f64, n: usize, log_w: f64) -> Option<f64> {
    if sse <= 0.0 {
        return None;
    }
    let n = n as f64;
    Some(-0.5 * n * ((2.0 * std::f64::consts::PI).ln() + (sse / n).ln() + 1.0) + 0.5 * log_w)
}

/// The statistics of one refitted model.
#[allow(clippy::too_many_arguments)]
pub(crate) fn describe(
    cands: &Candidates,
    terms: Vec<usize>,
    size: usize,
    rank: usize,
    r: &Refit,
    sst: f64,
    log_w: f64,
    mse_ref: Option<f64>,
) -> SubsetModel {
    let n = cands.nrows();
    let p = r.params;
    let nf = n as f64;
    let pf = p as f64;
    let i = f64::from(u8::from(cands.has_intercept()));
    let r2 = (1.0 - r.sse / sst).clamp(0.0, 1.0);
    let adj = 1.0 - (nf - i) / (nf - pf) * (1.0 - r2);
    let ll = log_likelihood(r.sse, n, log_w);
    let (press, press_note) = press(cands, r);
    SubsetModel {
        labels: cands.labels(&terms),
        terms,
        size,
        rank_in_size: rank,
        params: p,
        nobs: n,
        sse: r.sse,
        r_squared: r2,
        adj_r_squared: adj,
        cp: mse_ref.map(|m| r.sse / m - (nf - 2.0 * pf)),
        aic: ll.map(|l| -2.0 * l + 2.0 * pf),
        sbc: ll.map(|l| -2.0 * l + pf * nf.ln()),
        press,
        press_note,
    }
}

/// Leverage at or above which PRESS is treated as undefined.
const LEVERAGE_ONE: f64 = 1.0 - 1e-10;

/// PRESS from the refit's residuals and leverages (Allen 1974), or why it is undefined.
pub(crate) fn press(cands: &Candidates, r: &Refit) -> (Option<f64>, Option<String>) {
    let Some(h) = &r.leverages else {
        return (None, None);
    };
    if let Some(i) = h.iter().position(|&v| v >= LEVERAGE_ONE) {
        return (
            None,
            Some(format!(
                "PRESS is undefined: row {} has leverage 1, so the model fits it exactly and cannot predict it \
                 when it is left out",
                cands.keys()[i]
            )),
        );
    }
    let s = crate::linalg::sum_dd(r.weighted_residuals.iter().zip(h).map(|(e, h)| (e / (1.0 - h)).powi(2)));
    (Some(s), None)
}

/// The reference model for Cp: the full model, or the largest full-rank model when it is not of
/// full rank (terms are left out one at a time, each time the one holding the first aliased
/// column in the order forced terms, then candidates in design order).
fn cp_reference(
    cands: &Candidates,
    fac: &Factored,
    forced: &[usize],
    free: &[usize],
    qr: &QrOptions,
) -> CpReference {
    let n = cands.nrows();
    let mut terms: Vec<usize> = forced.iter().chain(free).copied().collect();
    let mut left_out = Vec::new();
    let mut reasons = Vec::new();
    loop {
        match fac.refit(cands, &terms, qr, false) {
            Ok(r) => {
                let df = n.saturating_sub(r.params);
                let mut sorted = terms.clone();
                sorted.sort_unstable();
                let labels = cands.labels(&sorted);
                let lo = cands.labels(&left_out);
                if df == 0 {
                    return CpReference {
                        labels,
                        left_out: lo,
                        mse: None,
                        df_resid: 0,
                        note: Some(format!(
                            "Mallows' Cp is not given: the full-rank reference model has {} coefficients for {n} rows, \
                             which leaves no residual degrees of freedom to estimate σ².",
                            r.params
                        )),
                    };
                }
                let note = (!left_out.is_empty()).then(|| {
                    format!(
                        "The model with every candidate is not of full rank ({}). Mallows' Cp therefore uses the mean \
                         squared error of the largest full-rank model, which leaves out {}.",
                        reasons.join("; "),
                        crate::error::join_names(&lo)
                    )
                });
                return CpReference {
                    labels,
                    left_out: lo,
                    mse: Some(r.sse / df as f64),
                    df_resid: df,
                    note,
                };
            }
            Err(a) => {
                let names = cands.column_names();
                let Some(pos) = terms.iter().position(|&t| {
                    cands.terms()[t].columns.clone().any(|j| names[j] == a.column) && !forced.contains(&t)
                }) else {
                    return CpReference {
                        labels: Vec::new(),
                        left_out: cands.labels(&left_out),
                        mse: None,
                        df_resid: 0,
                        note: Some(
                            "Mallows' Cp is not given: no full-rank reference model was found.".to_owned(),
                        ),
                    };
                };
                reasons
                    .push(EngineError::Aliased { column: a.column, combination: a.combination }.to_string());
                left_out.push(terms.remove(pos));
            }
        }
    }
}

//! Comparing models: the partial F-test between nested models, the drop-one table of a chosen
//! model, and a recommendation that names the model each criterion prefers and says why they
//! differ.

use super::candidates::{Candidates, Refit};
use super::cv::{CvOptions, CvResult, cross_validate};
use super::qrfit::Factored;
use super::subsets::{SubsetModel, SubsetSearch, log_likelihood, model_name};
use crate::dist::f_sf;
use crate::error::{EngineError, Result};
use crate::linalg::QrOptions;

/// The extra-sum-of-squares F-test of a smaller model against a larger one that contains it
/// (Kutner, Nachtsheim, Neter & Li 2004, *Applied Linear Statistical Models*, 5th ed., §7.3 (section from memory),
/// the general linear test): `F = ((SSE_s − SSE_l)/(df_s − df_l)) / (SSE_l/df_l)`.
#[derive(Debug, Clone, PartialEq)]
pub struct PartialFTest {
    pub(crate) smaller: Vec<String>,
    pub(crate) larger: Vec<String>,
    pub(crate) added: Vec<String>,
    pub(crate) sse_smaller: f64,
    pub(crate) sse_larger: f64,
    pub(crate) df_smaller: usize,
    pub(crate) df_larger: usize,
    pub(crate) f: Option<f64>,
    pub(crate) p: Option<f64>,
}

impl PartialFTest {
    /// Terms of the smaller model.
    pub fn smaller(&self) -> &[String] {
        &self.smaller
    }
    /// Terms of the larger model.
    pub fn larger(&self) -> &[String] {
        &self.larger
    }
    /// Terms the larger model adds.
    pub fn added(&self) -> &[String] {
        &self.added
    }
    /// SSE of the smaller model.
    pub fn sse_smaller(&self) -> f64 {
        self.sse_smaller
    }
    /// SSE of the larger model.
    pub fn sse_larger(&self) -> f64 {
        self.sse_larger
    }
    /// Residual degrees of freedom of the smaller model.
    pub fn df_smaller(&self) -> usize {
        self.df_smaller
    }
    /// Residual degrees of freedom of the larger model.
    pub fn df_larger(&self) -> usize {
        self.df_larger
    }
    /// Numerator degrees of freedom, `df_s − df_l`.
    pub fn df_num(&self) -> usize {
        self.df_smaller - self.df_larger
    }
    /// The extra sum of squares, `SSE_s − SSE_l`.
    pub fn extra_ss(&self) -> f64 {
        self.sse_smaller - self.sse_larger
    }
    /// The F statistic; `None` when the larger model fits exactly (SSE = 0).
    pub fn f(&self) -> Option<f64> {
        self.f
    }
    /// Its upper-tail p-value.
    pub fn p_value(&self) -> Option<f64> {
        self.p
    }
}

fn refit_or_error(cands: &Candidates, terms: &[usize], qr: &QrOptions) -> Result<Refit> {
    cands
        .refit(terms, None, qr, false)
        .map_err(|a| EngineError::Aliased { column: a.column, combination: a.combination })
}

fn check_terms(cands: &Candidates, terms: &[usize]) -> Result<Vec<usize>> {
    let mut t = terms.to_vec();
    t.sort_unstable();
    t.dedup();
    if let Some(&bad) = t.iter().find(|&&i| i >= cands.terms().len()) {
        return Err(EngineError::BadSearchOption {
            option: "model".to_owned(),
            reason: format!("there is no candidate number {bad}; there are {}", cands.terms().len()),
        });
    }
    Ok(t)
}

fn extra_f(sse_s: f64, df_s: usize, sse_l: f64, df_l: usize) -> (Option<f64>, Option<f64>) {
    if sse_l <= 0.0 || df_l == 0 || df_s <= df_l {
        return (None, None);
    }
    let f = ((sse_s - sse_l).max(0.0) / (df_s - df_l) as f64) / (sse_l / df_l as f64);
    (Some(f), Some(f_sf(f, (df_s - df_l) as f64, df_l as f64)))
}

/// The partial F-test between two models given as term lists (in either order); the one with
/// fewer terms must be contained in the other.
///
/// # Errors
/// [`EngineError::NotNested`] when neither model contains the other or they are equal;
/// [`EngineError::Aliased`] when a model is not of full rank;
/// [`EngineError::NoResidualDf`] when the larger model leaves no residual degrees of freedom.
pub fn partial_f_test(cands: &Candidates, a: &[usize], b: &[usize], qr: &QrOptions) -> Result<PartialFTest> {
    let a = check_terms(cands, a)?;
    let b = check_terms(cands, b)?;
    let (small, large) = if a.len() <= b.len() { (a, b) } else { (b, a) };
    let missing: Vec<usize> = small.iter().copied().filter(|t| large.binary_search(t).is_err()).collect();
    if !missing.is_empty() || small.len() == large.len() {
        return Err(EngineError::NotNested {
            smaller: model_name(&cands.labels(&small)),
            larger: model_name(&cands.labels(&large)),
            missing: cands.labels(&missing),
        });
    }
    let n = cands.nrows();
    let rs = refit_or_error(cands, &small, qr)?;
    let rl = refit_or_error(cands, &large, qr)?;
    if rl.params >= n {
        return Err(EngineError::NoResidualDf { rows: n, params: rl.params });
    }
    let (df_s, df_l) = (n - rs.params, n - rl.params);
    let (f, p) = extra_f(rs.sse, df_s, rl.sse, df_l);
    let added: Vec<usize> = large.iter().copied().filter(|t| small.binary_search(t).is_err()).collect();
    Ok(PartialFTest {
        smaller: cands.labels(&small),
        larger: cands.labels(&large),
        added: cands.labels(&added),
        sse_smaller: rs.sse,
        sse_larger: rl.sse,
        df_smaller: df_s,
        df_larger: df_l,
        f,
        p,
    })
}

/// One row of the drop-one table: what happens when one term leaves the chosen model.
#[derive(Debug, Clone, PartialEq)]
pub struct DropOneRow {
    pub(crate) term: String,
    pub(crate) df: usize,
    pub(crate) extra_ss: f64,
    pub(crate) f: Option<f64>,
    pub(crate) p: Option<f64>,
    pub(crate) delta_adj_r_squared: f64,
    pub(crate) delta_aic: Option<f64>,
    pub(crate) delta_cv_rmse: Option<f64>,
}

impl DropOneRow {
    /// The dropped term.
    pub fn term(&self) -> &str {
        &self.term
    }
    /// Its coefficients (numerator degrees of freedom).
    pub fn df(&self) -> usize {
        self.df
    }
    /// The rise in SSE when it is dropped.
    pub fn extra_ss(&self) -> f64 {
        self.extra_ss
    }
    /// Partial F statistic of the term.
    pub fn f(&self) -> Option<f64> {
        self.f
    }
    /// Its p-value.
    pub fn p_value(&self) -> Option<f64> {
        self.p
    }
    /// Adjusted R² without the term minus adjusted R² of the model (negative: the term helps).
    pub fn delta_adj_r_squared(&self) -> f64 {
        self.delta_adj_r_squared
    }
    /// AIC without the term minus AIC of the model (positive: the term helps).
    pub fn delta_aic(&self) -> Option<f64> {
        self.delta_aic
    }
    /// Mean CV RMSE without the term minus that of the model, on the same folds (positive: the
    /// term helps prediction).
    pub fn delta_cv_rmse(&self) -> Option<f64> {
        self.delta_cv_rmse
    }
}

/// The drop-one table of a model.
#[derive(Debug, Clone, PartialEq)]
pub struct DropOneTable {
    pub(crate) labels: Vec<String>,
    pub(crate) adj_r_squared: f64,
    pub(crate) aic: Option<f64>,
    pub(crate) cv_rmse: Option<f64>,
    pub(crate) rows: Vec<DropOneRow>,
    pub(crate) cv: Option<CvResult>,
}

impl DropOneTable {
    /// The model's terms.
    pub fn labels(&self) -> &[String] {
        &self.labels
    }
    /// Its adjusted R².
    pub fn adj_r_squared(&self) -> f64 {
        self.adj_r_squared
    }
    /// Its AIC.
    pub fn aic(&self) -> Option<f64> {
        self.aic
    }
    /// Its mean CV RMSE, when cross-validation was asked for.
    pub fn cv_rmse(&self) -> Option<f64> {
        self.cv_rmse
    }
    /// One row per term.
    pub fn rows(&self) -> &[DropOneRow] {
        &self.rows
    }
    /// The cross-validation behind the RMSE column (model first, then each reduced model).
    pub fn cv(&self) -> Option<&CvResult> {
        self.cv.as_ref()
    }
}

/// Options of [`drop_one`].
#[derive(Debug, Clone, Default)]
pub struct DropOneOptions<'a> {
    /// QR options of the refits.
    pub qr: QrOptions,
    /// Cross-validation for the RMSE column; none when `None`.
    pub cv: Option<CvOptions<'a>>,
}

fn adj_r2(cands: &Candidates, sse: f64, params: usize, sst: f64) -> f64 {
    let n = cands.nrows() as f64;
    let i = f64::from(u8::from(cands.has_intercept()));
    1.0 - (n - i) / (n - params as f64) * (sse / sst)
}

fn aic(cands: &Candidates, sse: f64, params: usize) -> Option<f64> {
    log_likelihood(sse, cands.nrows(), cands.log_weight_sum()).map(|l| -2.0 * l + 2.0 * params as f64)
}

/// The drop-one table of the model made of `terms`: for each term, the partial F-test of the
/// model without it, and the change in adjusted R², AIC and (optionally) CV RMSE.
///
/// # Errors
/// [`EngineError::Aliased`] when the model is not of full rank, [`EngineError::NoResidualDf`]
/// when it leaves no residual degrees of freedom, and the errors of [`cross_validate`].
pub fn drop_one(cands: &Candidates, terms: &[usize], opts: &DropOneOptions<'_>) -> Result<DropOneTable> {
    let terms = check_terms(cands, terms)?;
    let n = cands.nrows();
    let sst = cands.ssto();
    let fac = Factored::new(cands, &terms, None);
    let refit = |t: &[usize]| {
        fac.refit(cands, t, &opts.qr, false)
            .map_err(|a| EngineError::Aliased { column: a.column, combination: a.combination })
    };
    let full = refit(&terms)?;
    if full.params >= n {
        return Err(EngineError::NoResidualDf { rows: n, params: full.params });
    }
    let df_full = n - full.params;
    let reduced: Vec<Vec<usize>> = (0..terms.len())
        .map(|i| terms.iter().enumerate().filter(|&(j, _)| j != i).map(|(_, &t)| t).collect())
        .collect();
    let cv = match &opts.cv {
        Some(o) => {
            let mut models = vec![terms.clone()];
            models.extend(reduced.iter().cloned());
            Some(cross_validate(cands, &models, o)?)
        }
        None => None,
    };
    let cv_mean = |i: usize| cv.as_ref().map(|c| c.models()[i].rmse().mean);
    let base_adj = adj_r2(cands, full.sse, full.params, sst);
    let base_aic = aic(cands, full.sse, full.params);
    let mut rows = Vec::with_capacity(terms.len());
    for (i, red) in reduced.iter().enumerate() {
        let r = refit(red)?;
        let (f, p) = extra_f(r.sse, n - r.params, full.sse, df_full);
        rows.push(DropOneRow {
            term: cands.terms()[terms[i]].label.clone(),
            df: full.params - r.params,
            extra_ss: r.sse - full.sse,
            f,
            p,
            delta_adj_r_squared: adj_r2(cands, r.sse, r.params, sst) - base_adj,
            delta_aic: match (aic(cands, r.sse, r.params), base_aic) {
                (Some(a), Some(b)) => Some(a - b),
                _ => None,
            },
            delta_cv_rmse: match (cv_mean(i + 1), cv_mean(0)) {
                (Some(a), Some(b)) => Some(a - b),
                _ => None,
            },
        });
    }
    Ok(DropOneTable {
        labels: cands.labels(&terms),
        adj_r_squared: base_adj,
        aic: base_aic,
        cv_rmse: cv_mean(0),
        rows,
        cv,
    })
}

/// A model-choice criterion.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Criterion {
    /// Largest adjusted R².
    AdjRSquared,
    /// Smallest Mallows' Cp.
    Cp,
    /// Smallest AIC.
    Aic,
    /// Smallest SBC (BIC).
    Sbc,
    /// Smallest PRESS (leave-one-out prediction error).
    Press,
    /// Smallest mean k-fold cross-validated RMSE.
    CvRmse,
}

impl Criterion {
    /// The criterion's name in words.
    pub fn name(self) -> &'static str {
        match self {
            Criterion::AdjRSquared => "adjusted R²",
            Criterion::Cp => "Mallows' Cp",
            Criterion::Aic => "AIC",
            Criterion::Sbc => "SBC",
            Criterion::Press => "PRESS",
            Criterion::CvRmse => "cross-validated RMSE",
        }
    }
}

/// The model one criterion prefers.
#[derive(Debug, Clone, PartialEq)]
pub struct Pick {
    pub(crate) criterion: Criterion,
    pub(crate) labels: Vec<String>,
    pub(crate) size: usize,
    pub(crate) value: f64,
}

impl Pick {
    /// The criterion.
    pub fn criterion(&self) -> Criterion {
        self.criterion
    }
    /// The preferred model's terms.
    pub fn labels(&self) -> &[String] {
        &self.labels
    }
    /// Its size (terms).
    pub fn size(&self) -> usize {
        self.size
    }
    /// The criterion's value for it.
    pub fn value(&self) -> f64 {
        self.value
    }
}

/// What each criterion prefers, and why they differ, in plain words. The choice stays with the
/// analyst.
#[derive(Debug, Clone, PartialEq)]
pub struct Recommendation {
    pub(crate) picks: Vec<Pick>,
    pub(crate) explanation: Vec<String>,
}

impl Recommendation {
    /// One pick per criterion that could be computed.
    pub fn picks(&self) -> &[Pick] {
        &self.picks
    }
    /// Whether every criterion picks the same model.
    pub fn agree(&self) -> bool {
        self.picks.windows(2).all(|w| w[0].labels == w[1].labels)
    }
    /// The explanation, paragraph by paragraph.
    pub fn explanation(&self) -> &[String] {
        &self.explanation
    }
}

fn pick_min<'a>(
    models: impl Iterator<Item = &'a SubsetModel>,
    criterion: Criterion,
    value: impl Fn(&SubsetModel) -> Option<f64>,
) -> Option<Pick> {
    let mut best: Option<(&SubsetModel, f64)> = None;
    for m in models {
        if let Some(v) = value(m)
            && best.is_none_or(|(_, b)| v < b)
        {
            best = Some((m, v));
        }
    }
    best.map(|(m, v)| Pick { criterion, labels: m.labels().to_vec(), size: m.size(), value: v })
}

/// Names the model each criterion prefers among the reported models of a search (and, when
/// given, among the cross-validated models), and explains in plain words why they differ.
pub fn recommend(search: &SubsetSearch, cv: Option<&CvResult>) -> Recommendation {
    let mut picks = Vec::new();
    let models = || search.models();
    if let Some(mut p) = pick_min(models(), Criterion::AdjRSquared, |m| Some(-m.adj_r_squared())) {
        p.value = -p.value;
        picks.push(p);
    }
    picks.extend(pick_min(models(), Criterion::Cp, SubsetModel::cp));
    picks.extend(pick_min(models(), Criterion::Aic, SubsetModel::aic));
    picks.extend(pick_min(models(), Criterion::Sbc, SubsetModel::sbc));
    picks.extend(pick_min(models(), Criterion::Press, SubsetModel::press));
    if let Some(cv) = cv {
        let best = cv.models().iter().map(|m| (m, m.rmse().mean)).min_by(|a, b| a.1.total_cmp(&b.1));
        if let Some((m, v)) = best {
            picks.push(Pick {
                criterion: Criterion::CvRmse,
                labels: m.labels().to_vec(),
                size: m.terms().len(),
                value: v,
            });
        }
    }
    let n = search.nobs() as f64;
    let mut explanation = Vec::new();
    let mut groups: Vec<(Vec<String>, usize, Vec<&str>)> = Vec::new();
    for p in &picks {
        match groups.iter_mut().find(|g| g.0 == p.labels) {
            Some(g) => g.2.push(p.criterion.name()),
            None => groups.push((p.labels.clone(), p.size, vec![p.criterion.name()])),
        }
    }
    if groups.len() <= 1 {
        if let Some(g) = groups.first() {
            explanation.push(format!(
                "Every criterion prefers the same model: {} ({} term{}).",
                model_name(&g.0),
                g.1,
                if g.1 == 1 { "" } else { "s" }
            ));
        }
    } else {
        let list: Vec<String> = groups
            .iter()
            .map(|g| {
                format!(
                    "{} prefer{} {} ({} terms)",
                    join(&g.2),
                    if g.2.len() == 1 { "s" } else { "" },
                    model_name(&g.0),
                    g.1
                )
            })
            .collect();
        explanation.push(format!("The criteria do not agree: {}.", list.join("; ")));
        explanation.push(format!(
            "They differ because each charges a different price for an extra coefficient. SBC adds ln(n) ≈ {:.1} to \
             its score per coefficient, AIC adds 2 and Mallows' Cp behaves like AIC, while adjusted R² rises whenever \
             a term's F statistic exceeds 1, a much lower bar. So SBC tends to pick the smallest model, adjusted R² \
             the largest, with AIC and Cp in between.",
            n.ln()
        ));
        explanation.push(
            "PRESS and cross-validated RMSE do not charge a price at all: they measure how well each model predicts \
             rows it was not fitted to. They favour the model that predicts best, which tends to lie between the SBC \
             and AIC choices; cross-validation is also the only one of these that stays valid when the response is \
             transformed differently between models."
                .to_owned(),
        );
    }
    explanation.push(
        "These criteria rank fits to the same data that chose the predictors, so differences between close \
         candidates are often within noise. The choice stays with you: prefer terms with a plausible mechanism, \
         weigh what each indicator costs to collect and explain, and remember that p-values after a search are \
         optimistic."
            .to_owned(),
    );
    Recommendation { picks, explanation }
}

fn join(names: &[&str]) -> String {
    let v: Vec<String> = names.iter().map(|s| (*s).to_owned()).collect();
    crate::error::join_names(&v)
}

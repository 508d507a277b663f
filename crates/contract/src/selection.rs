//! The selection document: best subsets, cross-validation and nested-model comparisons.
//!
//! Built from the engine's [`SubsetSearch`] (and, when they were computed, its cross-validation,
//! recommendation, partial F-tests and drop-one table) by [`SelectionDocument::new`]. Values that
//! can be undefined (Cp without a full-rank reference, PRESS with a leverage of 1, AIC of an exact
//! fit) are [`Number`]s; the `notes` say why.

use serde::{Deserialize, Serialize};
use wardcast_engine::selection::{
    CpReference, Criterion, CvModel, CvResult, DropOneTable, PartialFTest, Recommendation, SearchMethod,
    SizeBest, Spread, SubsetModel, SubsetSearch,
};

use crate::SCHEMA_VERSION;
use crate::cautions::{Caution, standing_cautions};
use crate::numbers::Number;
use crate::spec::ModelSpec;

/// Work counts of the search.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct CountsDoc {
    /// All subsets of the free candidates, 2^k.
    pub subsets: u64,
    /// Subsets whose residual sum of squares the fast path computed.
    pub evaluated: u64,
    /// Subsets skipped because a bound proved they cannot be among the best.
    pub pruned: u64,
    /// Subsets above the maximum size that were not computed.
    pub beyond_max_size: u64,
    /// Aliased subsets met.
    pub aliased: u64,
    /// QR refits made to settle the ranking.
    pub refits: usize,
}

/// The model whose mean squared error scales Mallows' Cp.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CpReferenceDoc {
    /// Terms of the reference model.
    pub terms: Vec<String>,
    /// Terms of the full model left out to reach full rank.
    pub left_out: Vec<String>,
    /// The reference mean squared error; null when none exists.
    pub mse: Number,
    /// Its residual degrees of freedom.
    pub df_residual: usize,
    /// Why the reference is not the full model, when it is not.
    pub note: Option<String>,
}

impl From<&CpReference> for CpReferenceDoc {
    fn from(c: &CpReference) -> Self {
        CpReferenceDoc {
            terms: c.labels().to_vec(),
            left_out: c.left_out().to_vec(),
            mse: Number::from_opt(c.mse()),
            df_residual: c.df_resid(),
            note: c.note().map(str::to_owned),
        }
    }
}

/// One reported model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelDoc {
    /// Position within its size, 1 for the smallest SSE.
    pub rank: usize,
    /// Its terms, in design order.
    pub terms: Vec<String>,
    /// Regression coefficients, intercept included.
    pub params: usize,
    /// Residual degrees of freedom.
    pub df_residual: usize,
    /// Residual (weighted) sum of squares.
    pub sse: f64,
    /// R².
    pub r_squared: f64,
    /// Adjusted R².
    pub adj_r_squared: f64,
    /// Mallows' Cp; null without a reference model.
    pub cp: Number,
    /// AIC = −2ℓ + 2p; null for an exact fit.
    pub aic: Number,
    /// SBC = −2ℓ + p ln n; null for an exact fit.
    pub sbc: Number,
    /// PRESS; null when a leverage equals 1 (see `press_note`).
    pub press: Number,
    /// Leave-one-out RMSE, √(PRESS / Σw).
    pub loo_rmse: Number,
    /// Why PRESS is undefined, when it is.
    pub press_note: Option<String>,
}

impl ModelDoc {
    fn new(m: &SubsetModel, weight_sum: f64) -> Self {
        ModelDoc {
            rank: m.rank_in_size(),
            terms: m.labels().to_vec(),
            params: m.params(),
            df_residual: m.df_resid(),
            sse: m.sse(),
            r_squared: m.r_squared(),
            adj_r_squared: m.adj_r_squared(),
            cp: Number::from_opt(m.cp()),
            aic: Number::from_opt(m.aic()),
            sbc: Number::from_opt(m.sbc()),
            press: Number::from_opt(m.press()),
            loo_rmse: Number::from_opt(m.loo_rmse(weight_sum)),
            press_note: m.press_note().map(str::to_owned),
        }
    }
}

/// A model near the top of its size that the refit found aliased.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AliasedDoc {
    /// Its terms.
    pub terms: Vec<String>,
    /// The aliasing in words.
    pub message: String,
}

/// The best models of one size.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SizeDoc {
    /// Number of terms (forced ones included, the intercept not counted).
    pub size: usize,
    /// The best models, smallest SSE first.
    pub models: Vec<ModelDoc>,
    /// Aliased models of this size that the search met (never ranked).
    pub aliased: u64,
    /// Models the refit found aliased.
    pub aliased_on_refit: Vec<AliasedDoc>,
    /// Models with no residual degrees of freedom.
    pub no_residual_df: u64,
}

impl SizeDoc {
    fn new(s: &SizeBest, weight_sum: f64) -> Self {
        SizeDoc {
            size: s.size(),
            models: s.models().iter().map(|m| ModelDoc::new(m, weight_sum)).collect(),
            aliased: s.aliased(),
            aliased_on_refit: s
                .aliased_on_refit()
                .iter()
                .map(|a| AliasedDoc { terms: a.labels().to_vec(), message: a.message().to_owned() })
                .collect(),
            no_residual_df: s.no_residual_df(),
        }
    }
}

/// Mean, standard deviation, minimum and maximum across repeats.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SpreadDoc {
    /// Mean.
    pub mean: f64,
    /// Standard deviation (n − 1 denominator; 0 for one repeat).
    pub sd: f64,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
}

impl From<Spread> for SpreadDoc {
    fn from(s: Spread) -> Self {
        SpreadDoc { mean: s.mean, sd: s.sd, min: s.min, max: s.max }
    }
}

/// The folds of one repeat, as the row keys of each test fold.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct FoldsDoc {
    /// Repeat number, from 1.
    pub repeat: usize,
    /// The keys held out in each fold, fold 1 first.
    pub test_keys: Vec<Vec<String>>,
}

/// Per-repeat values of one statistic.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ByRepeatDoc {
    /// RMSE of each repeat.
    pub rmse: Vec<f64>,
    /// MAE of each repeat.
    pub mae: Vec<f64>,
    /// Out-of-sample R² of each repeat.
    pub r_squared: Vec<f64>,
}

/// Cross-validated errors of one model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CvModelDoc {
    /// The model's terms.
    pub terms: Vec<String>,
    /// RMSE on the original scale across repeats.
    pub rmse: SpreadDoc,
    /// MAE on the original scale across repeats.
    pub mae: SpreadDoc,
    /// Out-of-sample R² across repeats.
    pub r_squared: SpreadDoc,
    /// The values of each repeat.
    pub by_repeat: ByRepeatDoc,
    /// Training fits that were rank deficient.
    pub rank_deficient_fits: usize,
    /// Test predictions that could not be transformed back and were left out.
    pub undefined_predictions: usize,
}

impl From<&CvModel> for CvModelDoc {
    fn from(m: &CvModel) -> Self {
        CvModelDoc {
            terms: m.labels().to_vec(),
            rmse: m.rmse().into(),
            mae: m.mae().into(),
            r_squared: m.r2().into(),
            by_repeat: ByRepeatDoc {
                rmse: m.rmse_by_repeat().to_vec(),
                mae: m.mae_by_repeat().to_vec(),
                r_squared: m.r2_by_repeat().to_vec(),
            },
            rank_deficient_fits: m.rank_deficient_fits(),
            undefined_predictions: m.undefined_predictions(),
        }
    }
}

/// The cross-validation section.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CvDoc {
    /// Folds per repeat.
    pub folds: usize,
    /// Repeats.
    pub repeats: usize,
    /// The seed of the fold generator (ChaCha8).
    pub seed: u64,
    /// The grouping column of grouped folds.
    pub grouped_by: Option<String>,
    /// Whether errors are weighted by the case weights.
    pub weighted: bool,
    /// The folds of every repeat.
    pub folds_used: Vec<FoldsDoc>,
    /// Errors of each model.
    pub models: Vec<CvModelDoc>,
    /// How the errors were measured.
    pub notes: Vec<String>,
}

impl CvDoc {
    /// Builds the section; `keys` are the row keys of the data the folds index.
    pub fn new(cv: &CvResult, keys: &[String]) -> Self {
        let folds_used = cv
            .assignments()
            .iter()
            .map(|a| {
                let mut test_keys = vec![Vec::new(); cv.folds()];
                for (key, &f) in keys.iter().zip(a.fold_of_row()) {
                    test_keys[f].push(key.clone());
                }
                FoldsDoc { repeat: a.repeat() + 1, test_keys }
            })
            .collect();
        CvDoc {
            folds: cv.folds(),
            repeats: cv.repeats(),
            seed: cv.seed(),
            grouped_by: cv.group_label().map(str::to_owned),
            weighted: cv.weighted(),
            folds_used,
            models: cv.models().iter().map(CvModelDoc::from).collect(),
            notes: cv.notes().to_vec(),
        }
    }
}

/// The model one criterion prefers.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PickDoc {
    /// A stable identifier: `adj_r_squared`, `cp`, `aic`, `sbc`, `press` or `cv_rmse`.
    pub criterion: String,
    /// The criterion in words.
    pub criterion_name: String,
    /// The preferred model's terms.
    pub terms: Vec<String>,
    /// Its size.
    pub size: usize,
    /// The criterion's value for it.
    pub value: f64,
}

/// What each criterion prefers and why they differ.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RecommendationDoc {
    /// One pick per criterion.
    pub picks: Vec<PickDoc>,
    /// Whether all criteria pick the same model.
    pub agree: bool,
    /// The explanation, paragraph by paragraph.
    pub explanation: Vec<String>,
}

fn criterion_id(c: Criterion) -> &'static str {
    match c {
        Criterion::AdjRSquared => "adj_r_squared",
        Criterion::Cp => "cp",
        Criterion::Aic => "aic",
        Criterion::Sbc => "sbc",
        Criterion::Press => "press",
        Criterion::CvRmse => "cv_rmse",
    }
}

impl From<&Recommendation> for RecommendationDoc {
    fn from(r: &Recommendation) -> Self {
        RecommendationDoc {
            picks: r
                .picks()
                .iter()
                .map(|p| PickDoc {
                    criterion: criterion_id(p.criterion()).to_owned(),
                    criterion_name: p.criterion().name().to_owned(),
                    terms: p.labels().to_vec(),
                    size: p.size(),
                    value: p.value(),
                })
                .collect(),
            agree: r.agree(),
            explanation: r.explanation().to_vec(),
        }
    }
}

/// A partial F-test between nested models.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PartialFDoc {
    /// Terms of the smaller model.
    pub smaller: Vec<String>,
    /// Terms of the larger model.
    pub larger: Vec<String>,
    /// Terms the larger model adds.
    pub added: Vec<String>,
    /// SSE of the smaller model.
    pub sse_smaller: f64,
    /// SSE of the larger model.
    pub sse_larger: f64,
    /// Numerator degrees of freedom.
    pub df_numerator: usize,
    /// Denominator degrees of freedom (residual df of the larger model).
    pub df_denominator: usize,
    /// The F statistic; null when the larger model fits exactly.
    pub f: Number,
    /// Its p-value.
    pub p_value: Number,
}

impl From<&PartialFTest> for PartialFDoc {
    fn from(t: &PartialFTest) -> Self {
        PartialFDoc {
            smaller: t.smaller().to_vec(),
            larger: t.larger().to_vec(),
            added: t.added().to_vec(),
            sse_smaller: t.sse_smaller(),
            sse_larger: t.sse_larger(),
            df_numerator: t.df_num(),
            df_denominator: t.df_larger(),
            f: Number::from_opt(t.f()),
            p_value: Number::from_opt(t.p_value()),
        }
    }
}

/// One row of the drop-one table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DropRowDoc {
    /// The dropped term.
    pub term: String,
    /// Its coefficients.
    pub df: usize,
    /// The rise in SSE without it.
    pub extra_ss: f64,
    /// Partial F statistic.
    pub f: Number,
    /// Its p-value.
    pub p_value: Number,
    /// Adjusted R² without the term minus that of the model.
    pub delta_adj_r_squared: f64,
    /// AIC without the term minus that of the model.
    pub delta_aic: Number,
    /// Mean CV RMSE without the term minus that of the model; null without cross-validation.
    pub delta_cv_rmse: Number,
}

/// The drop-one table of a chosen model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DropOneDoc {
    /// The model's terms.
    pub terms: Vec<String>,
    /// Its adjusted R².
    pub adj_r_squared: f64,
    /// Its AIC.
    pub aic: Number,
    /// Its mean CV RMSE; null without cross-validation.
    pub cv_rmse: Number,
    /// One row per term.
    pub rows: Vec<DropRowDoc>,
}

impl From<&DropOneTable> for DropOneDoc {
    fn from(t: &DropOneTable) -> Self {
        DropOneDoc {
            terms: t.labels().to_vec(),
            adj_r_squared: t.adj_r_squared(),
            aic: Number::from_opt(t.aic()),
            cv_rmse: Number::from_opt(t.cv_rmse()),
            rows: t
                .rows()
                .iter()
                .map(|r| DropRowDoc {
                    term: r.term().to_owned(),
                    df: r.df(),
                    extra_ss: r.extra_ss(),
                    f: Number::from_opt(r.f()),
                    p_value: Number::from_opt(r.p_value()),
                    delta_adj_r_squared: r.delta_adj_r_squared(),
                    delta_aic: Number::from_opt(r.delta_aic()),
                    delta_cv_rmse: Number::from_opt(r.delta_cv_rmse()),
                })
                .collect(),
        }
    }
}

/// The optional parts of a selection document.
#[derive(Debug, Clone, Copy, Default)]
pub struct SelectionParts<'a> {
    /// Cross-validation of some of the reported models.
    pub cv: Option<&'a CvResult>,
    /// The recommendation.
    pub recommendation: Option<&'a Recommendation>,
    /// Partial F-tests between nested models.
    pub comparisons: &'a [PartialFTest],
    /// The drop-one table of a chosen model.
    pub drop_one: Option<&'a DropOneTable>,
}

/// The whole selection document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SelectionDocument {
    /// Schema version.
    pub schema_version: String,
    /// Always `selection`.
    pub kind: String,
    /// The spec whose predictors are the candidates.
    pub spec: ModelSpec,
    /// Rows used.
    pub rows_used: usize,
    /// `exhaustive` or `leaps_and_bounds`.
    pub method: String,
    /// Every candidate term.
    pub candidates: Vec<String>,
    /// Terms forced into every model.
    pub forced: Vec<String>,
    /// Work counts.
    pub counts: CountsDoc,
    /// The model that scales Cp.
    pub cp_reference: CpReferenceDoc,
    /// The best models of each size.
    pub sizes: Vec<SizeDoc>,
    /// Cross-validation of the listed models, when run.
    pub cross_validation: Option<CvDoc>,
    /// What each criterion prefers, when computed.
    pub recommendation: Option<RecommendationDoc>,
    /// Partial F-tests between nested models.
    pub comparisons: Vec<PartialFDoc>,
    /// The drop-one table of a chosen model, when computed.
    pub drop_one: Option<DropOneDoc>,
    /// Plain-language notes: optimistic p-values after a search, AIC/SBC across response
    /// transforms, undefined values.
    pub notes: Vec<String>,
    /// The standing cautions.
    pub cautions: Vec<Caution>,
}

impl SelectionDocument {
    /// Builds the document from a search, the spec it ran on and the row keys of its data.
    pub fn new(spec: &ModelSpec, search: &SubsetSearch, keys: &[String], parts: SelectionParts<'_>) -> Self {
        let c = search.counts();
        SelectionDocument {
            schema_version: SCHEMA_VERSION.into(),
            kind: "selection".into(),
            spec: spec.clone(),
            rows_used: search.nobs(),
            method: match search.method() {
                SearchMethod::LeapsAndBounds => "leaps_and_bounds",
                _ => "exhaustive",
            }
            .into(),
            candidates: search.candidates().to_vec(),
            forced: search.forced().to_vec(),
            counts: CountsDoc {
                subsets: c.subsets,
                evaluated: c.evaluated,
                pruned: c.pruned,
                beyond_max_size: c.beyond_max_size,
                aliased: c.aliased,
                refits: c.refits,
            },
            cp_reference: search.cp_reference().into(),
            sizes: search.sizes().iter().map(|s| SizeDoc::new(s, search.weight_sum())).collect(),
            cross_validation: parts.cv.map(|cv| CvDoc::new(cv, keys)),
            recommendation: parts.recommendation.map(RecommendationDoc::from),
            comparisons: parts.comparisons.iter().map(PartialFDoc::from).collect(),
            drop_one: parts.drop_one.map(DropOneDoc::from),
            notes: search.notes().to_vec(),
            cautions: standing_cautions(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use wardcast_engine::selection::{
        CandidateTerm, Candidates, CvOptions, SearchOptions, best_subsets, cross_validate, recommend,
    };

    #[test]
    fn document_round_trips_and_marks_undefined_values() {
        // x1 is non-zero in one row only: PRESS is undefined for models holding it.
        let n = 20;
        let x0: Vec<f64> = (0..n).map(|i| ((i * 37) % 11) as f64).collect();
        let mut x1 = vec![0.0; n];
        x1[3] = 1.0;
        let y: Vec<f64> = (0..n).map(|i| 2.0 + 0.5 * x0[i] + ((i * 7) % 5) as f64 * 0.1).collect();
        let keys: Vec<String> = (0..n).map(|i| format!("w{i}")).collect();
        let cands = Candidates::new(
            wardcast_engine::Matrix::from_columns(&[x0, x1]),
            y,
            None,
            true,
            vec![
                CandidateTerm { label: "x0".into(), columns: 0..1 },
                CandidateTerm { label: "x1".into(), columns: 1..2 },
            ],
            vec!["x0".into(), "x1".into()],
            keys.clone(),
        )
        .unwrap();
        let search = best_subsets(&cands, &SearchOptions::default()).unwrap();
        let cv =
            cross_validate(&cands, &[vec![0]], &CvOptions { folds: 4, repeats: 2, ..CvOptions::default() })
                .unwrap();
        let rec = recommend(&search, Some(&cv));
        let spec = ModelSpec::new("y", ["x0", "x1"]);
        let doc = SelectionDocument::new(
            &spec,
            &search,
            &keys,
            SelectionParts { cv: Some(&cv), recommendation: Some(&rec), ..SelectionParts::default() },
        );
        let json = serde_json::to_value(&doc).unwrap();
        assert_eq!(json["kind"], "selection");
        assert_eq!(json["method"], "exhaustive");
        let full = &json["sizes"][2]["models"][0];
        assert!(full["press"].is_null(), "{full}");
        assert!(full["press_note"].as_str().unwrap().contains("leverage 1"));
        assert_eq!(json["cross_validation"]["folds_used"].as_array().unwrap().len(), 2);
        let held: usize = json["cross_validation"]["folds_used"][0]["test_keys"]
            .as_array()
            .unwrap()
            .iter()
            .map(|f| f.as_array().unwrap().len())
            .sum();
        assert_eq!(held, n, "every key is held out once per repeat");
        assert!(json["notes"].as_array().unwrap().iter().any(|v| v.as_str().unwrap().contains("optimistic")));
        let back: SelectionDocument = serde_json::from_value(json).unwrap();
        assert_eq!(back, doc);
    }
}

//! How the model was chosen, for the brief's Model section: best subsets over the candidate
//! indicators, seeded cross-validation of the best model of each size and of the analyst's
//! model, and partial F tests of adding each other candidate to the analyst's model.

use wardcast_contract::spec::{ModelSpec, PredictorSpec};
use wardcast_engine::selection::{self, Candidates, CvOptions, SearchOptions};
use wardcast_engine::{Design, Table};

use super::{CandidateModel, ModelChoice, NestedTest};
use crate::Result;

/// How the analyst's model was chosen: best subsets over `candidates`, seeded CV of the best
/// model of each size (and the analyst's model), and partial F tests of adding each other
/// candidate to the analyst's model.
pub fn model_choice(
    table: &Table,
    spec: &ModelSpec,
    candidates: &[String],
    cv: &ChoiceCv,
) -> Result<ModelChoice> {
    let mut full = spec.clone();
    full.predictors = candidates
        .iter()
        .map(|c| {
            spec.predictors.iter().find(|p| &p.column == c).cloned().unwrap_or(PredictorSpec {
                column: c.clone(),
                transform: None,
                reference_level: None,
            })
        })
        .collect();
    let design = Design::build(table, &full.to_engine()?)?;
    let cands = Candidates::from_design(&design)?;
    let search = selection::best_subsets(&cands, &SearchOptions { top: 10, ..SearchOptions::default() })?;
    let chosen: Vec<usize> = spec
        .predictors
        .iter()
        .filter_map(|p| full.predictors.iter().position(|q| q.column == p.column))
        .collect();
    let is_chosen = |terms: &[usize]| {
        let mut a = terms.to_vec();
        a.sort_unstable();
        let mut b = chosen.clone();
        b.sort_unstable();
        a == b
    };
    let picked: Vec<&selection::SubsetModel> = search
        .models()
        .filter(|m| (m.rank_in_size() == 1 && !m.terms().is_empty()) || is_chosen(m.terms()))
        .collect();
    let terms: Vec<Vec<usize>> = picked.iter().map(|m| m.terms().to_vec()).collect();
    let result = selection::cross_validate(
        &cands,
        &terms,
        &CvOptions {
            folds: cv.folds,
            repeats: cv.repeats,
            seed: cv.seed,
            response_transform: design.spec().response_transform,
            ..CvOptions::default()
        },
    )?;
    let candidates_out = picked
        .iter()
        .zip(result.models())
        .map(|(m, c)| CandidateModel {
            predictors: m.labels().to_vec(),
            adj_r_squared: m.adj_r_squared(),
            cp: m.cp(),
            aic: m.aic(),
            sbc: m.sbc(),
            press: m.press(),
            cv_rmse: Some(c.rmse().mean),
            cv_rmse_sd: Some(c.rmse().sd),
            chosen: is_chosen(m.terms()),
        })
        .collect();
    let nested_tests = (0..cands.terms().len())
        .filter(|t| !chosen.contains(t))
        .filter_map(|extra| {
            let mut larger = chosen.clone();
            larger.push(extra);
            selection::partial_f_test(&cands, &chosen, &larger, &Default::default()).ok()
        })
        .map(|t| NestedTest {
            smaller: t.smaller().to_vec(),
            added: t.added().to_vec(),
            f: t.f(),
            df_num: t.df_num(),
            df_den: t.df_larger(),
            p_value: t.p_value(),
        })
        .collect();
    Ok(ModelChoice {
        search: format!(
            "Exact best subsets of {} candidate indicators; the best model of each size and the reported model are compared.",
            candidates.len()
        ),
        criteria: vec![
            "adjusted R²".into(),
            "Mallows' Cp".into(),
            "AIC".into(),
            "SBC".into(),
            "PRESS".into(),
            format!("{}-fold cross-validated RMSE ({} repeats)", cv.folds, cv.repeats),
        ],
        candidates: candidates_out,
        nested_tests,
        cv_folds: Some(result.folds()),
        cv_seeds: vec![cv.seed],
        notes: search.notes().to_vec(),
    })
}

/// Cross-validation settings of a model choice.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ChoiceCv {
    /// Folds.
    pub folds: usize,
    /// Repeats.
    pub repeats: usize,
    /// Seed (recorded in the brief).
    pub seed: u64,
}

impl Default for ChoiceCv {
    fn default() -> Self {
        Self { folds: 10, repeats: 5, seed: 20_240_601 }
    }
}

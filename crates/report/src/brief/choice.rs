//! How the model was chosen, for the brief's Model section: best subsets over the candidate
//! indicators, seeded cross-validation of the best model of each size and of the analyst's
//! model, and partial F tests of adding each other candidate to the analyst's model.
//!
//! [`model_choice`] runs that comparison itself; [`from_selection`] reads it off a selection
//! document that was computed elsewhere (the web app's subset-search job).

use wardcast_contract::selection::{ModelDoc, SelectionDocument};
use wardcast_contract::spec::ModelSpec;
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
    let full = spec.with_predictor_columns(candidates);
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

/// The brief's view of a finished selection: the best model of each size (with its
/// cross-validated RMSE when the document cross-validated it) and the analyst's own model,
/// marked `chosen`, followed by the document's partial F tests and notes.
///
/// `chosen` is the analyst's model as the search would report it (its terms and statistics on
/// the rows of the search); it is added after the best models unless it is one of them. Pass
/// `None` when the analyst's model is not made of the searched candidates; then no candidate is
/// marked chosen.
pub fn from_selection(doc: &SelectionDocument, chosen: Option<&ModelDoc>) -> ModelChoice {
    let same = |a: &[String], b: &[String]| {
        let mut a = a.to_vec();
        let mut b = b.to_vec();
        a.sort_unstable();
        b.sort_unstable();
        a == b
    };
    let is_chosen = |terms: &[String]| chosen.is_some_and(|c| same(&c.terms, terms));
    let cv_of = |terms: &[String]| {
        doc.cross_validation
            .as_ref()
            .and_then(|cv| cv.models.iter().find(|m| same(&m.terms, terms)))
            .map(|m| (m.rmse.mean, m.rmse.sd))
    };
    let candidate = |m: &ModelDoc| {
        let cv = cv_of(&m.terms);
        CandidateModel {
            predictors: m.terms.clone(),
            adj_r_squared: m.adj_r_squared,
            cp: m.cp.as_f64(),
            aic: m.aic.as_f64(),
            sbc: m.sbc.as_f64(),
            press: m.press.as_f64(),
            cv_rmse: cv.map(|c| c.0),
            cv_rmse_sd: cv.map(|c| c.1),
            chosen: is_chosen(&m.terms),
        }
    };
    let mut candidates: Vec<CandidateModel> = doc
        .sizes
        .iter()
        .filter_map(|s| s.models.first())
        .filter(|m| !m.terms.is_empty())
        .map(candidate)
        .collect();
    if let Some(c) = chosen
        && !candidates.iter().any(|m| m.chosen)
    {
        candidates.push(candidate(c));
    }
    let cv = doc.cross_validation.as_ref();
    let mut criteria: Vec<String> =
        ["adjusted R²", "Mallows' Cp", "AIC", "SBC", "PRESS"].iter().map(|s| (*s).to_owned()).collect();
    if let Some(cv) = cv {
        criteria.push(format!("{}-fold cross-validated RMSE ({} repeats)", cv.folds, cv.repeats));
    }
    let method = if doc.method == "leaps_and_bounds" { " (leaps and bounds)" } else { "" };
    let forced = if doc.forced.is_empty() {
        String::new()
    } else {
        format!(", with {} in every model", doc.forced.join(", "))
    };
    let mut notes = doc.notes.clone();
    if let Some(r) = &doc.recommendation {
        notes.extend(r.explanation.iter().cloned());
    }
    ModelChoice {
        search: format!(
            "Exact best subsets{method} of {} candidate indicators{forced}, on {} areas; the best model of \
             each size and the reported model are compared.",
            doc.candidates.len(),
            doc.rows_used
        ),
        criteria,
        candidates,
        nested_tests: doc
            .comparisons
            .iter()
            .map(|t| NestedTest {
                smaller: t.smaller.clone(),
                added: t.added.clone(),
                f: t.f.as_f64(),
                df_num: t.df_numerator,
                df_den: t.df_denominator,
                p_value: t.p_value.as_f64(),
            })
            .collect(),
        cv_folds: cv.map(|c| c.folds),
        cv_seeds: cv.map(|c| vec![c.seed]).unwrap_or_default(),
        notes,
    }
}

#[cfg(test)]
mod tests {
    use wardcast_contract::selection::SelectionParts;
    use wardcast_engine::Matrix;
    use wardcast_engine::selection::{
        CandidateTerm, Candidates, CvOptions, SearchOptions, best_subsets, cross_validate, partial_f_test,
        recommend,
    };

    use super::*;

    /// Three candidates on 30 rows; y depends on x0 and x1 only.
    fn candidates() -> Candidates {
        let n = 30;
        let x0: Vec<f64> = (0..n).map(|i| ((i * 37) % 11) as f64).collect();
        let x1: Vec<f64> = (0..n).map(|i| ((i * 13) % 7) as f64).collect();
        let x2: Vec<f64> = (0..n).map(|i| ((i * 5) % 9) as f64).collect();
        let y: Vec<f64> =
            (0..n).map(|i| 1.0 + 0.8 * x0[i] - 0.5 * x1[i] + ((i * 7) % 5) as f64 * 0.3).collect();
        let names: Vec<String> = vec!["x0".into(), "x1".into(), "x2".into()];
        let terms = (0..3).map(|j| CandidateTerm { label: names[j].clone(), columns: j..j + 1 }).collect();
        Candidates::new(
            Matrix::from_columns(&[x0, x1, x2]),
            y,
            None,
            true,
            terms,
            names,
            (0..n).map(|i| format!("a{i}")).collect(),
        )
        .expect("valid candidates")
    }

    #[test]
    fn from_selection_keeps_best_models_cv_and_marks_the_chosen_one() {
        let cands = candidates();
        let search =
            best_subsets(&cands, &SearchOptions { top: 2, ..SearchOptions::default() }).expect("search");
        let best: Vec<Vec<usize>> =
            search.sizes().iter().filter_map(|s| s.models().first().map(|m| m.terms().to_vec())).collect();
        let cv_opts = CvOptions { folds: 5, repeats: 3, seed: 7, ..CvOptions::default() };
        let cv = cross_validate(&cands, &best, &cv_opts).expect("cv");
        let rec = recommend(&search, Some(&cv));
        let test = partial_f_test(&cands, &[0], &[0, 1], &Default::default()).expect("nested");
        let spec = ModelSpec::new("y", ["x0", "x1", "x2"]);
        let doc = SelectionDocument::new(
            &spec,
            &search,
            cands.keys(),
            SelectionParts {
                cv: Some(&cv),
                recommendation: Some(&rec),
                comparisons: std::slice::from_ref(&test),
                drop_one: None,
            },
        );
        // The analyst's model is x1 alone: the second-best model of size 1.
        let own = doc.sizes[1].models.iter().find(|m| m.terms == ["x1"]).expect("x1 is listed").clone();
        let choice = from_selection(&doc, Some(&own));

        let sizes_with_terms = doc.sizes.iter().filter(|s| s.size > 0).count();
        assert_eq!(choice.candidates.len(), sizes_with_terms + 1, "best of each size plus the own model");
        let chosen: Vec<&CandidateModel> = choice.candidates.iter().filter(|c| c.chosen).collect();
        assert_eq!(chosen.len(), 1);
        assert_eq!(chosen[0].predictors, ["x1"]);
        assert_eq!(chosen[0].adj_r_squared, own.adj_r_squared);
        assert_eq!(chosen[0].cv_rmse, None, "x1 alone was not cross-validated");
        let first = &choice.candidates[0];
        let top = &doc.sizes[1].models[0];
        assert_eq!(first.predictors, top.terms);
        assert_eq!(first.cp, top.cp.as_f64());
        assert_eq!(first.press, top.press.as_f64());
        let cv_top =
            cv.models().iter().find(|m| m.labels() == top.terms.as_slice()).expect("cross-validated");
        assert_eq!(first.cv_rmse, Some(cv_top.rmse().mean));
        assert_eq!(first.cv_rmse_sd, Some(cv_top.rmse().sd));
        assert_eq!(choice.cv_folds, Some(5));
        assert_eq!(choice.cv_seeds, vec![7]);
        assert_eq!(choice.nested_tests.len(), 1);
        assert_eq!(choice.nested_tests[0].added, ["x1"]);
        assert_eq!(choice.nested_tests[0].f, test.f());
        assert!(choice.criteria.iter().any(|c| c.contains("5-fold")));
        assert!(choice.notes.iter().any(|n| n.contains("optimistic")), "{:?}", choice.notes);

        // When the own model is the best of its size it is marked, not repeated.
        let best_two = doc.sizes[2].models[0].clone();
        let choice = from_selection(&doc, Some(&best_two));
        assert_eq!(choice.candidates.len(), sizes_with_terms);
        assert_eq!(choice.candidates.iter().filter(|c| c.chosen).count(), 1);

        // Without an own model nothing is chosen.
        let choice = from_selection(&doc, None);
        assert!(choice.candidates.iter().all(|c| !c.chosen));
    }
}

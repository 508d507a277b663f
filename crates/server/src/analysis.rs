//! The analysis pipeline shared by the command line and the web app: spec → design → fit →
//! documents. Everything here is blocking numerics; web handlers call it in `spawn_blocking`.

use wardcast_contract::checks::ChecksDocument;
use wardcast_contract::fit::FitDocument;
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::diagnostics::{self, CheckOptions, Checks};
use wardcast_engine::{Design, Fit, FitOptions, Table};

use crate::error::ServerError;

/// A validated, fitted model with the spec it came from.
#[derive(Debug, Clone)]
pub struct Fitted {
    spec: ModelSpec,
    fit: Fit,
}

impl Fitted {
    /// Validates the spec against the table and fits it.
    pub fn new(table: &Table, spec: &ModelSpec) -> Result<Self, ServerError> {
        let engine_spec = spec.to_engine()?;
        let design = Design::build(table, &engine_spec)?;
        let fit = Fit::new(&design, &FitOptions::default())?;
        Ok(Self {
            spec: spec.clone(),
            fit,
        })
    }

    /// The spec.
    pub fn spec(&self) -> &ModelSpec {
        &self.spec
    }

    /// The engine fit.
    pub fn fit(&self) -> &Fit {
        &self.fit
    }

    /// The fit document.
    pub fn fit_document(&self) -> Result<FitDocument, ServerError> {
        Ok(FitDocument::from_fit(&self.fit, &self.spec)?)
    }

    /// Runs every diagnostic with the default options.
    pub fn checks(&self) -> Checks {
        diagnostics::run(&self.fit, &CheckOptions::default())
    }

    /// The checks document.
    pub fn checks_document(&self) -> ChecksDocument {
        ChecksDocument::from_checks(&self.checks(), &self.spec)
    }
}

/// How the analyst's model was chosen: best subsets over `candidates`, seeded CV of the best
/// model of each size (and the analyst's model), and partial F tests of adding each other
/// candidate to the analyst's model.
pub fn model_choice(
    table: &Table,
    spec: &ModelSpec,
    candidates: &[String],
    cv: &ChoiceCv,
) -> Result<wardcast_report::brief::ModelChoice, ServerError> {
    use wardcast_engine::selection::{self, Candidates, CvOptions, SearchOptions};
    use wardcast_report::brief::{CandidateModel, ModelChoice, NestedTest};

    let mut full = spec.clone();
    full.predictors = candidates
        .iter()
        .map(|c| {
            spec.predictors
                .iter()
                .find(|p| &p.column == c)
                .cloned()
                .unwrap_or(wardcast_contract::spec::PredictorSpec {
                    column: c.clone(),
                    transform: None,
                    reference_level: None,
                })
        })
        .collect();
    let design = Design::build(table, &full.to_engine()?)?;
    let cands = Candidates::from_design(&design)?;
    let search = selection::best_subsets(
        &cands,
        &SearchOptions {
            top: 10,
            ..SearchOptions::default()
        },
    )?;
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
        .filter(|m| m.rank_in_size() == 1 || is_chosen(m.terms()))
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
            format!(
                "{}-fold cross-validated RMSE ({} repeats)",
                cv.folds, cv.repeats
            ),
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
        Self {
            folds: 10,
            repeats: 5,
            seed: 20_240_601,
        }
    }
}

/// Today's date as `YYYY-MM-DD` (UTC), from the system clock.
pub fn today() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0);
    civil_date(i64::try_from(secs / 86_400).unwrap_or(0))
}

/// The proleptic Gregorian date of a day count since 1970-01-01 (Hinnant's `civil_from_days`).
pub fn civil_date(days: i64) -> String {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!("{y:04}-{m:02}-{d:02}")
}

#[cfg(test)]
mod tests {
    use super::civil_date;

    #[test]
    fn civil_dates_match_known_days() {
        // Day counts since 1970-01-01 checked by hand against the calendar (common practice,
        // no published source): the epoch, a leap day, and the turn of a century.
        assert_eq!(civil_date(0), "1970-01-01");
        assert_eq!(civil_date(11_016), "2000-02-29");
        assert_eq!(civil_date(10_957), "2000-01-01");
        assert_eq!(civil_date(20_788), "2026-12-01");
    }
}

//! The allocation document: a formula allocation of prevention and service funding across
//! districts, with the shares of every basis side by side, the sensitivity to the basis, the
//! comparison with this year's budget and the simulated ranges.
//!
//! Built from an engine [`Allocation`] by [`AllocationDocument::from_allocation`]. Districts are
//! listed in key order; the document never ranks districts or people.

use serde::{Deserialize, Serialize};
use wardcast_engine::allocation::{
    Allocation, Basis, BoundStatus, CovarianceFactor, CurrentBudget, ExpectedSource, Percentiles,
};

use crate::SCHEMA_VERSION;
use crate::cautions::{Caution, standing_cautions};

/// The plain-language framing written into every allocation document.
pub const ALLOCATION_FRAMING: &str = "This is a formula scenario for prevention and service funding for areas. \
It divides a budget among districts in proportion to a stated basis; it does not describe, score or rank any \
resident, and it is not a recommendation. The shares under each basis are shown side by side because the choice \
of basis can move money as much as the model's uncertainty does, or more: compare the sensitivity with the \
simulated ranges. Any decision rests with local policy, legal and equity review.";

/// The weights of a blended basis.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BlendWeightsDoc {
    /// Weight on population shares.
    pub population: f64,
    /// Weight on observed-incident shares.
    pub observed: f64,
    /// Weight on model-expected-incident shares.
    pub expected: f64,
}

/// The settings the allocation was made with.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AllocationSettingsDoc {
    /// `population`, `observed`, `expected` or `blend`.
    pub basis: String,
    /// The blend weights; null unless the basis is `blend`.
    pub blend_weights: Option<BlendWeightsDoc>,
    /// The amount allocated, in whole currency units.
    pub total: u64,
    /// The least amount per district; null when none.
    pub floor: Option<u64>,
    /// The most per district; null when none.
    pub cap: Option<u64>,
    /// The rate unit of the model's response, e.g. 10000 for a rate per 10,000 residents.
    pub rate_unit: f64,
    /// Whether the model's response is the log of the rate.
    pub log_response: bool,
    /// Duan's smearing factor for a log response (1 otherwise), held fixed in the simulation.
    pub smearing: f64,
    /// The seed of the coefficient simulation (ChaCha8).
    pub seed: u64,
    /// The number of coefficient draws.
    pub draws: usize,
}

/// A district's shares under each basis, as fractions of 1.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SharesDoc {
    /// Share of residents.
    pub population: f64,
    /// Share of observed incidents.
    pub observed: f64,
    /// Share of model-expected incidents.
    pub expected: f64,
    /// Share under the blend; null unless the basis is `blend`.
    pub blend: Option<f64>,
}

/// Whole-unit amounts under each pure basis (after floors, caps and rounding).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct AmountsDoc {
    /// Under the population basis.
    pub population: u64,
    /// Under the observed basis.
    pub observed: u64,
    /// Under the expected basis.
    pub expected: u64,
}

/// One district's row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AllocationRowDoc {
    /// The district key.
    pub key: String,
    /// Residents.
    pub residents: f64,
    /// Observed incidents.
    pub observed: f64,
    /// Model-expected incidents at the coefficient estimates.
    pub expected: f64,
    /// `fitted` (a row of the fit) or `out_of_fit` (predicted from its indicator values).
    pub expected_source: String,
    /// Whether a negative predicted rate was set to 0.
    pub expected_clamped: bool,
    /// Shares under every basis.
    pub shares: SharesDoc,
    /// Amounts under every pure basis.
    pub amounts_by_basis: AmountsDoc,
    /// Range of the district's share across the pure bases, in percentage points.
    pub share_range_pp: f64,
    /// The proposed amount in whole currency units.
    pub proposed: u64,
    /// The proposal before rounding.
    pub unrounded: f64,
    /// `free`, `at_floor` or `at_cap`.
    pub bound: String,
    /// This year's budget; null when the budget table has no row for the district.
    pub current_budget: Option<u64>,
    /// `"no current budget"` when `current_budget` is null, else null.
    pub budget_note: Option<String>,
    /// `proposed − current_budget`; null without a current budget.
    pub change: Option<i64>,
    /// `100·change/current_budget`; null without a current budget or when it is 0.
    pub percent_change: Option<f64>,
}

/// How two pure bases differ.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BasisComparisonDoc {
    /// The first basis.
    pub first: String,
    /// The second basis.
    pub second: String,
    /// Largest absolute share difference, in percentage points.
    pub max_abs_pp: f64,
    /// The district where it occurs.
    pub max_key: String,
    /// Mean absolute share difference, in percentage points.
    pub mean_abs_pp: f64,
    /// Whole units that change district when switching between the two bases.
    pub amount_moved: u64,
}

/// How much the choice of basis moves shares.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SensitivityDoc {
    /// Pairwise comparisons of the pure bases.
    pub comparisons: Vec<BasisComparisonDoc>,
    /// Largest per-district share range across the pure bases, in percentage points.
    pub max_range_pp: f64,
    /// Mean per-district share range, in percentage points.
    pub mean_range_pp: f64,
}

/// The 2.5, 50 and 97.5 percentiles of simulated values.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RangeDoc {
    /// 2.5th percentile.
    pub p2_5: f64,
    /// Median.
    pub p50: f64,
    /// 97.5th percentile.
    pub p97_5: f64,
}

impl From<Percentiles> for RangeDoc {
    fn from(p: Percentiles) -> Self {
        Self { p2_5: p.p2_5, p50: p.p50, p97_5: p.p97_5 }
    }
}

/// Simulated ranges for one district.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DistrictRangeDoc {
    /// The district key.
    pub key: String,
    /// Expected incidents.
    pub expected: RangeDoc,
    /// Share under the simulated basis, before floors and caps.
    pub basis_share: RangeDoc,
    /// Amount after floors and caps, before rounding.
    pub amount: RangeDoc,
    /// `amount / total`.
    pub share: RangeDoc,
}

/// The model uncertainty of the allocation.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct UncertaintyDoc {
    /// The seed.
    pub seed: u64,
    /// The number of draws.
    pub draws: usize,
    /// The basis simulated.
    pub basis: String,
    /// `cholesky` or `eigen` (semi-definite covariance).
    pub covariance_factor: String,
    /// District-draws whose predicted rate was negative and set to 0.
    pub clamped_draws: usize,
    /// The widest 95% range of a simulated basis share, in percentage points.
    pub max_share_width_pp: f64,
    /// How the ranges were made.
    pub method: String,
    /// Ranges per district, in key order.
    pub districts: Vec<DistrictRangeDoc>,
}

/// A budget row whose key matches no allocated district.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct UnmatchedBudgetDoc {
    /// The key as the budget table spells it.
    pub key: String,
    /// Its amount.
    pub amount: u64,
}

/// The whole allocation document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AllocationDocument {
    /// Schema version.
    pub schema_version: String,
    /// Always `allocation`.
    pub kind: String,
    /// The settings.
    pub settings: AllocationSettingsDoc,
    /// One row per district, in key order.
    pub districts: Vec<AllocationRowDoc>,
    /// Budget rows that match no district.
    pub unmatched_budgets: Vec<UnmatchedBudgetDoc>,
    /// The sensitivity to the basis.
    pub sensitivity: SensitivityDoc,
    /// The simulated ranges.
    pub uncertainty: UncertaintyDoc,
    /// The framing as prevention and service funding.
    pub framing: String,
    /// Notes on how the numbers were made.
    pub notes: Vec<String>,
    /// The standing cautions.
    pub cautions: Vec<Caution>,
}

fn basis_name(b: &Basis) -> String {
    b.name().to_owned()
}

impl AllocationDocument {
    /// Builds the document from an engine allocation.
    pub fn from_allocation(a: &Allocation) -> Self {
        let s = a.settings();
        let blend_weights = match s.basis {
            Basis::Blend(w) => {
                Some(BlendWeightsDoc { population: w.population, observed: w.observed, expected: w.expected })
            }
            _ => None,
        };
        let settings = AllocationSettingsDoc {
            basis: basis_name(&s.basis),
            blend_weights,
            total: s.total,
            floor: s.floor,
            cap: s.cap,
            rate_unit: s.rate_unit,
            log_response: s.response_transform.is_some(),
            smearing: s.smearing,
            seed: s.simulation.seed,
            draws: s.simulation.draws,
        };
        let districts = a
            .districts()
            .iter()
            .map(|d| {
                let current = match d.current {
                    CurrentBudget::Amount(v) => Some(v),
                    CurrentBudget::NoCurrentBudget => None,
                };
                AllocationRowDoc {
                    key: d.key.clone(),
                    residents: d.residents,
                    observed: d.observed,
                    expected: d.expected,
                    expected_source: match d.expected_source {
                        ExpectedSource::Fitted => "fitted",
                        ExpectedSource::OutOfFit => "out_of_fit",
                    }
                    .to_owned(),
                    expected_clamped: d.expected_clamped,
                    shares: SharesDoc {
                        population: d.shares.population,
                        observed: d.shares.observed,
                        expected: d.shares.expected,
                        blend: d.shares.blend,
                    },
                    amounts_by_basis: AmountsDoc {
                        population: d.amounts_by_basis.population,
                        observed: d.amounts_by_basis.observed,
                        expected: d.amounts_by_basis.expected,
                    },
                    share_range_pp: d.share_range_pp,
                    proposed: d.amount,
                    unrounded: d.unrounded_amount,
                    bound: match d.bound {
                        BoundStatus::Free => "free",
                        BoundStatus::AtFloor => "at_floor",
                        BoundStatus::AtCap => "at_cap",
                    }
                    .to_owned(),
                    current_budget: current,
                    budget_note: current.is_none().then(|| "no current budget".to_owned()),
                    change: d.change,
                    percent_change: d.percent_change,
                }
            })
            .collect();
        let sens = a.sensitivity();
        let sensitivity = SensitivityDoc {
            comparisons: sens
                .comparisons
                .iter()
                .map(|c| BasisComparisonDoc {
                    first: basis_name(&c.first),
                    second: basis_name(&c.second),
                    max_abs_pp: c.max_abs_pp,
                    max_key: c.max_key.clone(),
                    mean_abs_pp: c.mean_abs_pp,
                    amount_moved: c.amount_moved,
                })
                .collect(),
            max_range_pp: sens.max_range_pp,
            mean_range_pp: sens.mean_range_pp,
        };
        let u = a.uncertainty();
        let uncertainty = UncertaintyDoc {
            seed: u.seed,
            draws: u.draws,
            basis: basis_name(&u.basis),
            covariance_factor: match u.factor {
                CovarianceFactor::Cholesky => "cholesky",
                CovarianceFactor::Eigen => "eigen",
            }
            .to_owned(),
            clamped_draws: u.clamped_draws,
            max_share_width_pp: u.max_share_width_pp,
            method: "Coefficients drawn from a normal distribution with the estimated coefficients as mean and their \
                     estimated covariance; expected incidents, shares and amounts (after floors and caps, before \
                     rounding) recomputed for each draw; ranges are the 2.5th, 50th and 97.5th percentiles of the \
                     draws, not rescaled interval bounds."
                .to_owned(),
            districts: u
                .districts
                .iter()
                .map(|r| DistrictRangeDoc {
                    key: r.key.clone(),
                    expected: r.expected.into(),
                    basis_share: r.basis_share.into(),
                    amount: r.amount.into(),
                    share: r.share.into(),
                })
                .collect(),
        };
        AllocationDocument {
            schema_version: SCHEMA_VERSION.to_owned(),
            kind: "allocation".to_owned(),
            settings,
            districts,
            unmatched_budgets: a
                .unmatched_budgets()
                .iter()
                .map(|b| UnmatchedBudgetDoc { key: b.key.clone(), amount: b.amount })
                .collect(),
            sensitivity,
            uncertainty,
            framing: ALLOCATION_FRAMING.to_owned(),
            notes: a.notes().to_vec(),
            cautions: standing_cautions(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use wardcast_engine::allocation::{
        AllocationOptions, BlendWeights, BudgetRow, DistrictInput, ExpectedModel, SimulationOptions, allocate,
    };
    use wardcast_engine::{Design, Fit, FitOptions, Matrix};

    #[test]
    fn document_round_trips_and_marks_missing_budgets() {
        let x = Matrix::from_columns(&[vec![1.0, 2.0, 3.0, 4.0, 5.0]]);
        let y = vec![12.0, 15.5, 17.0, 21.5, 22.0];
        let keys: Vec<String> = ["A", "B", "C", "D", "E"].map(String::from).to_vec();
        let d = Design::from_matrix(x, y, None, vec!["x".into()], keys.clone(), true).expect("design");
        let fit = Fit::new(&d, &FitOptions::default()).expect("fit");
        let districts: Vec<DistrictInput> = keys
            .iter()
            .enumerate()
            .map(|(i, k)| DistrictInput {
                key: k.clone(),
                residents: 1000.0 * (i + 1) as f64,
                observed: 3.0 + i as f64,
            })
            .collect();
        let budgets =
            vec![BudgetRow { key: "A".into(), amount: 100 }, BudgetRow { key: "Q".into(), amount: 5 }];
        let model = ExpectedModel { fit: &fit, rate_unit: 1000.0, extra_rows: vec![] };
        let opts = AllocationOptions {
            total: 1000,
            basis: Basis::Blend(BlendWeights { population: 0.5, observed: 0.25, expected: 0.25 }),
            floor: Some(50),
            cap: Some(400),
            simulation: SimulationOptions { draws: 200, seed: 3 },
        };
        let a = allocate(&districts, &budgets, &model, &opts).expect("allocation");
        let doc = AllocationDocument::from_allocation(&a);
        assert_eq!(doc.districts.iter().map(|r| r.proposed).sum::<u64>(), 1000);
        assert_eq!(doc.districts[0].current_budget, Some(100));
        assert_eq!(doc.districts[1].budget_note.as_deref(), Some("no current budget"));
        assert_eq!(doc.unmatched_budgets, [UnmatchedBudgetDoc { key: "Q".into(), amount: 5 }]);
        assert_eq!(doc.settings.blend_weights.map(|w| w.expected), Some(0.25));
        assert_eq!((doc.settings.seed, doc.settings.draws), (3, 200));
        assert_eq!(doc.cautions.len(), 5);
        let text = serde_json::to_string(&doc).expect("serialise");
        assert!(!text.contains("\"rank"), "the document has no ranking field");
        let back: AllocationDocument = serde_json::from_str(&text).expect("parse");
        // serde_json without its exact-float feature may change the last digit of a parsed
        // float, so the round trip is compared on the fields that are not computed floats.
        assert_eq!(back.settings, doc.settings);
        assert_eq!(back.unmatched_budgets, doc.unmatched_budgets);
        assert_eq!(back.cautions, doc.cautions);
        let amounts = |d: &AllocationDocument| -> Vec<(String, u64, Option<u64>)> {
            d.districts.iter().map(|r| (r.key.clone(), r.proposed, r.current_budget)).collect()
        };
        assert_eq!(amounts(&back), amounts(&doc));
    }
}

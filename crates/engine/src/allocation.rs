//! Formula allocation of a prevention and service budget across districts, with the shares of
//! every basis side by side, floors and caps, exact whole-unit rounding, a comparison with this
//! year's budget, and the model uncertainty of the expected-incidents basis.
//!
//! The allocation funds areas, never people: nothing here ranks districts, and every list is
//! ordered by district key.
//!
//! # Method
//! 1. **Bases.** Each district has three non-negative weights: its residents, its observed
//!    incidents, and its model-expected incidents `max(0, x'b)·residents/unit` (the predicted
//!    rate per `unit` residents times residents; for a log-rate response `exp(x'b)·D·residents/unit`
//!    with Duan's smearing factor `D`). A basis share is a district's weight divided by the sum
//!    over districts. A blend takes the stated weighted mean of the three share vectors.
//! 2. **Floors and caps** are checked for feasibility (`floor ≤ cap`, `n·floor ≤ total ≤ n·cap`)
//!    and applied by iterative water-filling: amounts are proportional to the shares; districts
//!    outside their bounds are clamped and the remainder is redistributed in proportion among the
//!    unclamped ones until nothing changes (see [`water_fill`]).
//! 3. **Rounding** to whole currency units uses the largest-remainder (Hamilton) method
//!    (Balinski & Young 2001, *Fair Representation*, 2nd ed.), so the amounts sum exactly to the
//!    total; floors and caps are whole numbers and stay respected.
//! 4. **Uncertainty** of the expected basis: coefficient vectors are drawn from
//!    `N(b, Cov(b))` with a seeded ChaCha8 stream, expected incidents are recomputed for each
//!    draw, and shares and amounts are recomputed through the same floors and caps. The 2.5, 50
//!    and 97.5 percentiles of each district's values are reported; interval bounds are never
//!    normalised.

use std::collections::{BTreeMap, HashMap, HashSet};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

use crate::error::{EngineError, Result};
use crate::fit::Fit;
use crate::matrix::Matrix;
use crate::spec::Transform;

/// Relative tolerance on the blend weights summing to 1.
const BLEND_SUM_TOLERANCE: f64 = 1e-9;
/// Share differences closer than this (in percentage points) count as a tie, so rounding noise
/// does not pick the district named as the largest mover.
const TIE_PP: f64 = 1e-9;
/// Fewest simulation draws accepted (so the 2.5 and 97.5 percentiles rest on a few draws each).
pub const MIN_DRAWS: usize = 100;
/// Most simulation draws accepted (keeps a request bounded in time).
pub const MAX_DRAWS: usize = 100_000;
/// Default number of simulation draws.
pub const DEFAULT_DRAWS: usize = 2000;
/// Default simulation seed.
pub const DEFAULT_SEED: u64 = 20_250_417;

/// The weights of a blended basis. Each lies in [0, 1] and they sum to 1.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BlendWeights {
    /// Weight on the population shares.
    pub population: f64,
    /// Weight on the observed-incident shares.
    pub observed: f64,
    /// Weight on the model-expected-incident shares.
    pub expected: f64,
}

/// What the allocation is proportional to.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Basis {
    /// Residents.
    Population,
    /// Observed incidents.
    Observed,
    /// Model-expected incidents (predicted rate × residents).
    Expected,
    /// A stated weighted mean of the three share vectors.
    Blend(BlendWeights),
}

impl Basis {
    /// A short stable name: `population`, `observed`, `expected` or `blend`.
    pub fn name(&self) -> &'static str {
        match self {
            Basis::Population => "population",
            Basis::Observed => "observed",
            Basis::Expected => "expected",
            Basis::Blend(_) => "blend",
        }
    }

    /// The weights on (population, observed, expected) shares.
    fn weights(&self) -> [f64; 3] {
        match self {
            Basis::Population => [1.0, 0.0, 0.0],
            Basis::Observed => [0.0, 1.0, 0.0],
            Basis::Expected => [0.0, 0.0, 1.0],
            Basis::Blend(w) => [w.population, w.observed, w.expected],
        }
    }

    /// Whether the basis depends on the model.
    pub fn uses_model(&self) -> bool {
        self.weights()[2] > 0.0
    }
}

/// One district's inputs.
#[derive(Debug, Clone, PartialEq)]
pub struct DistrictInput {
    /// The district key.
    pub key: String,
    /// Resident population (positive).
    pub residents: f64,
    /// Observed incidents (non-negative).
    pub observed: f64,
}

/// One row of this year's budget table.
#[derive(Debug, Clone, PartialEq)]
pub struct BudgetRow {
    /// The district key as the budget table spells it.
    pub key: String,
    /// This year's amount in whole currency units.
    pub amount: u64,
}

/// The model that gives expected incidents.
#[derive(Debug, Clone)]
pub struct ExpectedModel<'a> {
    /// The fit; its response is a rate per `rate_unit` residents, untransformed or logged.
    pub fit: &'a Fit,
    /// The rate unit, e.g. 10,000 for a rate per 10,000 residents.
    pub rate_unit: f64,
    /// Design rows (as built by `Design::row_for_prediction`) for districts that are not among
    /// the fitted rows, e.g. rows the analyst excluded.
    pub extra_rows: Vec<(String, Vec<f64>)>,
}

/// Options of the coefficient simulation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SimulationOptions {
    /// Number of coefficient draws.
    pub draws: usize,
    /// Seed of the ChaCha8 stream.
    pub seed: u64,
}

impl Default for SimulationOptions {
    fn default() -> Self {
        Self { draws: DEFAULT_DRAWS, seed: DEFAULT_SEED }
    }
}

/// Options of an allocation.
#[derive(Debug, Clone, PartialEq)]
pub struct AllocationOptions {
    /// The amount to allocate, in whole currency units.
    pub total: u64,
    /// The basis of the proposal.
    pub basis: Basis,
    /// The least amount any district receives.
    pub floor: Option<u64>,
    /// The most any district receives.
    pub cap: Option<u64>,
    /// The coefficient simulation.
    pub simulation: SimulationOptions,
}

/// Where a district's expected incidents come from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ExpectedSource {
    /// The district is one of the fitted rows.
    Fitted,
    /// The district is not among the fitted rows; it was predicted from the design row supplied.
    OutOfFit,
}

/// Whether a bound holds a district's amount.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BoundStatus {
    /// Neither floor nor cap binds.
    Free,
    /// Raised to the floor.
    AtFloor,
    /// Lowered to the cap.
    AtCap,
}

/// A district's shares under each basis (fractions of 1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BasisShares {
    /// Share of residents.
    pub population: f64,
    /// Share of observed incidents.
    pub observed: f64,
    /// Share of expected incidents.
    pub expected: f64,
    /// Share under the blend, when the proposal uses one.
    pub blend: Option<f64>,
}

/// Whole-unit amounts a district would receive under each pure basis, after floors, caps and
/// rounding.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct BasisAmounts {
    /// Under the population basis.
    pub population: u64,
    /// Under the observed basis.
    pub observed: u64,
    /// Under the expected basis.
    pub expected: u64,
}

/// This year's budget for a district.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CurrentBudget {
    /// The budget table has a row for the district.
    Amount(u64),
    /// The budget table has no row for the district ("no current budget").
    NoCurrentBudget,
}

/// One district's allocation.
#[derive(Debug, Clone, PartialEq)]
pub struct DistrictAllocation {
    /// The district key.
    pub key: String,
    /// Residents.
    pub residents: f64,
    /// Observed incidents.
    pub observed: f64,
    /// Model-expected incidents at the coefficient estimates.
    pub expected: f64,
    /// Where the expected value comes from.
    pub expected_source: ExpectedSource,
    /// Whether the point prediction of the rate was negative and clamped to 0.
    pub expected_clamped: bool,
    /// Shares under every basis.
    pub shares: BasisShares,
    /// Amounts under every pure basis (after floors, caps and rounding).
    pub amounts_by_basis: BasisAmounts,
    /// Smallest share over the three pure bases.
    pub share_min: f64,
    /// Largest share over the three pure bases.
    pub share_max: f64,
    /// `share_max − share_min`, in percentage points.
    pub share_range_pp: f64,
    /// The proposal before rounding (after floors and caps).
    pub unrounded_amount: f64,
    /// The proposed whole-unit amount.
    pub amount: u64,
    /// Whether a floor or cap holds the proposal.
    pub bound: BoundStatus,
    /// This year's budget.
    pub current: CurrentBudget,
    /// `amount − current`; `None` without a current budget.
    pub change: Option<i64>,
    /// `100·change/current`; `None` without a current budget or when it is 0.
    pub percent_change: Option<f64>,
}

/// How two pure bases differ.
#[derive(Debug, Clone, PartialEq)]
pub struct BasisComparison {
    /// The first basis.
    pub first: Basis,
    /// The second basis.
    pub second: Basis,
    /// Largest absolute share difference over districts, in percentage points.
    pub max_abs_pp: f64,
    /// The district where it occurs (the first key in order on a tie within 1e-9 points).
    pub max_key: String,
    /// Mean absolute share difference, in percentage points.
    pub mean_abs_pp: f64,
    /// Money that changes district when switching between the two bases, after floors, caps and
    /// rounding: half the sum of absolute amount differences.
    pub amount_moved: u64,
}

/// How much the choice of basis moves shares.
#[derive(Debug, Clone, PartialEq)]
pub struct Sensitivity {
    /// Population–observed, population–expected and observed–expected.
    pub comparisons: Vec<BasisComparison>,
    /// Largest per-district range of shares across the pure bases, in percentage points.
    pub max_range_pp: f64,
    /// Mean per-district range, in percentage points.
    pub mean_range_pp: f64,
}

/// The 2.5, 50 and 97.5 percentiles of simulated values (linear interpolation between order
/// statistics, Hyndman & Fan 1996 definition 7).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Percentiles {
    /// 2.5th percentile.
    pub p2_5: f64,
    /// Median.
    pub p50: f64,
    /// 97.5th percentile.
    pub p97_5: f64,
}

/// Simulated ranges for one district.
#[derive(Debug, Clone, PartialEq)]
pub struct DistrictRange {
    /// The district key.
    pub key: String,
    /// Expected incidents.
    pub expected: Percentiles,
    /// Share under the simulated basis, before floors and caps.
    pub basis_share: Percentiles,
    /// Amount after floors and caps, before rounding.
    pub amount: Percentiles,
    /// `amount / total`.
    pub share: Percentiles,
}

/// How the covariance matrix was factored for the simulation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CovarianceFactor {
    /// Cholesky factorisation (positive definite).
    Cholesky,
    /// Symmetric eigendecomposition with zero eigenvalues kept at zero (semi-definite).
    Eigen,
}

/// The model uncertainty of the allocation.
#[derive(Debug, Clone, PartialEq)]
pub struct Uncertainty {
    /// The seed of the ChaCha8 stream.
    pub seed: u64,
    /// The number of coefficient draws.
    pub draws: usize,
    /// The basis simulated: the proposal's basis when it uses the model, else the expected basis.
    pub basis: Basis,
    /// How the covariance was factored.
    pub factor: CovarianceFactor,
    /// District-draws whose predicted rate was negative and clamped to 0.
    pub clamped_draws: usize,
    /// The widest 95% range of a district's simulated basis share, in percentage points, to set
    /// beside [`Sensitivity::max_range_pp`]: model uncertainty against the choice of basis.
    pub max_share_width_pp: f64,
    /// Ranges per district, in key order.
    pub districts: Vec<DistrictRange>,
}

/// The settings an allocation was made with.
#[derive(Debug, Clone, PartialEq)]
pub struct AllocationSettings {
    /// The total.
    pub total: u64,
    /// The proposal's basis.
    pub basis: Basis,
    /// The floor.
    pub floor: Option<u64>,
    /// The cap.
    pub cap: Option<u64>,
    /// The rate unit of the model's response.
    pub rate_unit: f64,
    /// The response transform of the model (`None` or the log).
    pub response_transform: Option<Transform>,
    /// Duan's smearing factor for a log response (1 otherwise).
    pub smearing: f64,
    /// The simulation options.
    pub simulation: SimulationOptions,
}

/// A complete allocation. Immutable; read it through the getters.
#[derive(Debug, Clone)]
pub struct Allocation {
    settings: AllocationSettings,
    districts: Vec<DistrictAllocation>,
    sensitivity: Sensitivity,
    uncertainty: Uncertainty,
    unmatched_budgets: Vec<BudgetRow>,
    notes: Vec<String>,
}

impl Allocation {
    /// The settings.
    pub fn settings(&self) -> &AllocationSettings {
        &self.settings
    }
    /// Per-district results, in key order.
    pub fn districts(&self) -> &[DistrictAllocation] {
        &self.districts
    }
    /// How much the basis moves shares.
    pub fn sensitivity(&self) -> &Sensitivity {
        &self.sensitivity
    }
    /// The simulated ranges.
    pub fn uncertainty(&self) -> &Uncertainty {
        &self.uncertainty
    }
    /// Budget rows whose key matches no district, in key order.
    pub fn unmatched_budgets(&self) -> &[BudgetRow] {
        &self.unmatched_budgets
    }
    /// Plain-language notes on how the numbers were made.
    pub fn notes(&self) -> &[String] {
        &self.notes
    }
}

/// Checks blend weights: each in [0, 1] and summing to 1.
pub fn validate_basis(basis: &Basis) -> Result<()> {
    if let Basis::Blend(w) = basis {
        for (name, v) in [("population", w.population), ("observed", w.observed), ("expected", w.expected)] {
            if !(v.is_finite() && (0.0..=1.0).contains(&v)) {
                return Err(EngineError::BadBlendWeights {
                    reason: format!("the {name} weight is {v}; each weight must lie between 0 and 1"),
                });
            }
        }
        let sum = w.population + w.observed + w.expected;
        if (sum - 1.0).abs() > BLEND_SUM_TOLERANCE {
            return Err(EngineError::BadBlendWeights { reason: format!("the weights sum to {sum}, not 1") });
        }
    }
    Ok(())
}

/// Checks that a floor and a cap can hold for `n` districts sharing `total`.
pub fn check_bounds(n: usize, total: u64, floor: Option<u64>, cap: Option<u64>) -> Result<()> {
    let nn = n as u128;
    if let (Some(f), Some(c)) = (floor, cap)
        && f > c
    {
        return Err(EngineError::FloorAboveCap { floor: f, cap: c });
    }
    if let Some(f) = floor
        && nn * u128::from(f) > u128::from(total)
    {
        return Err(EngineError::FloorsExceedTotal {
            floor: f,
            districts: n,
            needed: nn * u128::from(f),
            total,
        });
    }
    if let Some(c) = cap
        && nn * u128::from(c) < u128::from(total)
    {
        return Err(EngineError::CapsBelowTotal { cap: c, districts: n, allowed: nn * u128::from(c), total });
    }
    Ok(())
}

/// Shares proportional to non-negative weights; an error when they sum to zero.
fn shares_of(values: &[f64], basis: &str) -> Result<Vec<f64>> {
    let sum: f64 = values.iter().sum();
    if !(sum > 0.0 && sum.is_finite()) {
        return Err(EngineError::ZeroBasis { basis: basis.to_owned() });
    }
    Ok(values.iter().map(|v| v / sum).collect())
}

/// Combines the three share vectors with the basis weights.
fn combine(basis: &Basis, pop: &[f64], obs: &[f64], exp: &[f64]) -> Vec<f64> {
    let [a, b, c] = basis.weights();
    (0..pop.len()).map(|i| a * pop[i] + b * obs[i] + c * exp[i]).collect()
}

/// Splits `total` in proportion to `shares` with every amount in `[floors[i], caps[i]]`, by
/// iterative water-filling.
///
/// Each round divides what is left after the clamped districts among the free ones in
/// proportion to their shares. If some free districts then lie above their cap or below their
/// floor, the side with the larger total violation is clamped (both when equal), and the round
/// repeats. Clamping only the larger side keeps every clamp final: if the excess above caps is
/// at least the shortfall below floors, the proportional factor can only rise in later rounds,
/// so a district above its cap stays above it (and symmetrically for floors). When the free
/// districts' shares are all zero, what is left is split equally among them. The caller checks
/// feasibility first ([`check_bounds`]). Returns the amounts and each district's bound status.
pub fn water_fill(shares: &[f64], total: f64, floors: &[f64], caps: &[f64]) -> (Vec<f64>, Vec<BoundStatus>) {
    let n = shares.len();
    let mut amount = vec![0.0; n];
    let mut status = vec![BoundStatus::Free; n];
    // At most n rounds clamp something; one more confirms stability.
    for _ in 0..=n {
        let free: Vec<usize> = (0..n).filter(|&i| status[i] == BoundStatus::Free).collect();
        if free.is_empty() {
            break;
        }
        let fixed: f64 = (0..n).filter(|&i| status[i] != BoundStatus::Free).map(|i| amount[i]).sum();
        let left = total - fixed;
        let weight: f64 = free.iter().map(|&i| shares[i]).sum();
        for &i in &free {
            amount[i] = if weight > 0.0 { left * shares[i] / weight } else { left / free.len() as f64 };
        }
        let over: f64 = free.iter().map(|&i| (amount[i] - caps[i]).max(0.0)).sum();
        let under: f64 = free.iter().map(|&i| (floors[i] - amount[i]).max(0.0)).sum();
        if over == 0.0 && under == 0.0 {
            break;
        }
        for &i in &free {
            if over >= under && amount[i] > caps[i] {
                amount[i] = caps[i];
                status[i] = BoundStatus::AtCap;
            }
            if under >= over && amount[i] < floors[i] {
                amount[i] = floors[i];
                status[i] = BoundStatus::AtFloor;
            }
        }
    }
    (amount, status)
}

/// Rounds non-negative amounts that sum to `total` to whole units summing exactly to `total`, by
/// the largest-remainder (Hamilton) method (Balinski & Young 2001), keeping each within its
/// whole-unit floor and cap.
///
/// Each amount is first rounded down (and clamped to its bounds, which guards against rounding
/// noise); the units still missing go one each to the districts with the largest fractional
/// parts that are below their cap. Ties go to the earlier district in the order given (key
/// order). If the clamping left too many units, they are taken back one each from the smallest
/// fractional parts above the floor.
pub fn largest_remainder(amounts: &[f64], total: u64, floors: &[u64], caps: &[u64]) -> Vec<u64> {
    let n = amounts.len();
    let mut whole: Vec<u64> = (0..n)
        .map(|i| {
            let a = amounts[i].max(0.0).floor();
            let a = if a >= u64::MAX as f64 { u64::MAX } else { a as u64 };
            a.clamp(floors[i], caps[i])
        })
        .collect();
    let frac: Vec<f64> = (0..n).map(|i| amounts[i] - amounts[i].floor()).collect();
    let assigned: u128 = whole.iter().map(|&v| u128::from(v)).sum();
    let mut order: Vec<usize> = (0..n).collect();
    if assigned < u128::from(total) {
        // Largest fractional part first; the sort is stable, so ties keep key order.
        order.sort_by(|&a, &b| frac[b].total_cmp(&frac[a]));
        let mut missing = u128::from(total) - assigned;
        while missing > 0 {
            let before = missing;
            for &i in &order {
                if missing == 0 {
                    break;
                }
                if whole[i] < caps[i] {
                    whole[i] += 1;
                    missing -= 1;
                }
            }
            if before == missing {
                break;
            }
        }
    } else if assigned > u128::from(total) {
        order.sort_by(|&a, &b| frac[a].total_cmp(&frac[b]));
        let mut extra = assigned - u128::from(total);
        while extra > 0 {
            let before = extra;
            for &i in &order {
                if extra == 0 {
                    break;
                }
                if whole[i] > floors[i] {
                    whole[i] -= 1;
                    extra -= 1;
                }
            }
            if before == extra {
                break;
            }
        }
    }
    whole
}

/// A factor `A` with `A·Aᵀ = cov`, by Cholesky when positive definite and otherwise by a
/// symmetric (Jacobi) eigendecomposition with eigenvalues at rounding level set to zero.
///
/// # Errors
/// [`EngineError::NotPositiveSemidefinite`] when an eigenvalue is clearly negative.
pub fn covariance_factor(cov: &Matrix) -> Result<(Matrix, CovarianceFactor)> {
    let p = cov.nrows();
    let scale = (0..p).map(|j| cov.get(j, j).abs()).fold(0.0_f64, f64::max);
    if let Some(l) = cholesky(cov, scale) {
        return Ok((l, CovarianceFactor::Cholesky));
    }
    let (values, vectors) = jacobi_eigen(cov);
    let top = values.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let tol = 1e-10 * top.max(scale);
    if let Some(&bad) = values.iter().find(|&&v| v < -tol) {
        return Err(EngineError::NotPositiveSemidefinite { eigenvalue: bad });
    }
    let mut a = Matrix::zeros(p, p);
    for (k, value) in values.iter().enumerate() {
        let s = value.max(0.0).sqrt();
        for i in 0..p {
            a.set(i, k, vectors.get(i, k) * s);
        }
    }
    Ok((a, CovarianceFactor::Eigen))
}

/// Lower Cholesky factor, or `None` when a pivot is not clearly positive.
fn cholesky(c: &Matrix, scale: f64) -> Option<Matrix> {
    let p = c.nrows();
    let mut l = Matrix::zeros(p, p);
    for i in 0..p {
        for j in 0..=i {
            let mut s = c.get(i, j);
            for k in 0..j {
                s -= l.get(i, k) * l.get(j, k);
            }
            if i == j {
                if s.is_nan() || s <= 1e-14 * scale {
                    return None;
                }
                l.set(i, i, s.sqrt());
            } else {
                l.set(i, j, s / l.get(j, j));
            }
        }
    }
    Some(l)
}

/// Eigenvalues and eigenvectors (as columns) of a symmetric matrix by cyclic Jacobi rotations
/// (Golub & Van Loan 2013, *Matrix Computations*, 4th ed., §8.5).
fn jacobi_eigen(c: &Matrix) -> (Vec<f64>, Matrix) {
    let n = c.nrows();
    let mut a = Matrix::zeros(n, n);
    for i in 0..n {
        for j in 0..n {
            a.set(i, j, 0.5 * (c.get(i, j) + c.get(j, i)));
        }
    }
    let mut v = Matrix::identity(n);
    let norm: f64 = a.as_slice().iter().map(|x| x * x).sum::<f64>().sqrt();
    for _sweep in 0..100 {
        let off: f64 = (0..n)
            .flat_map(|i| (0..n).filter(move |&j| j != i).map(move |j| (i, j)))
            .map(|(i, j)| a.get(i, j).powi(2))
            .sum::<f64>()
            .sqrt();
        if off <= 1e-15 * norm || norm == 0.0 {
            break;
        }
        for p in 0..n {
            for q in p + 1..n {
                let apq = a.get(p, q);
                if apq == 0.0 {
                    continue;
                }
                let theta = (a.get(q, q) - a.get(p, p)) / (2.0 * apq);
                let sign = if theta >= 0.0 { 1.0 } else { -1.0 };
                let t = sign / (theta.abs() + (theta * theta + 1.0).sqrt());
                let cs = 1.0 / (t * t + 1.0).sqrt();
                let sn = t * cs;
                for k in 0..n {
                    let (akp, akq) = (a.get(k, p), a.get(k, q));
                    a.set(k, p, cs * akp - sn * akq);
                    a.set(k, q, sn * akp + cs * akq);
                }
                for k in 0..n {
                    let (apk, aqk) = (a.get(p, k), a.get(q, k));
                    a.set(p, k, cs * apk - sn * aqk);
                    a.set(q, k, sn * apk + cs * aqk);
                }
                for k in 0..n {
                    let (vkp, vkq) = (v.get(k, p), v.get(k, q));
                    v.set(k, p, cs * vkp - sn * vkq);
                    v.set(k, q, sn * vkp + cs * vkq);
                }
            }
        }
    }
    ((0..n).map(|i| a.get(i, i)).collect(), v)
}

/// Standard normal draws by the Box–Muller transform (Box & Muller 1958) from 53-bit uniforms.
struct Normal {
    rng: ChaCha8Rng,
    spare: Option<f64>,
}

impl Normal {
    fn new(seed: u64) -> Self {
        Self { rng: ChaCha8Rng::seed_from_u64(seed), spare: None }
    }
    fn uniform(&mut self) -> f64 {
        // In (0, 1): the midpoint of one of 2^53 equal cells.
        ((self.rng.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn next(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let (u, v) = (self.uniform(), self.uniform());
        let r = (-2.0 * u.ln()).sqrt();
        let angle = 2.0 * std::f64::consts::PI * v;
        self.spare = Some(r * angle.sin());
        r * angle.cos()
    }
}

/// The 2.5, 50 and 97.5 percentiles of `values` (Hyndman & Fan 1996, definition 7).
pub fn percentiles(values: &[f64]) -> Percentiles {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let q = |p: f64| -> f64 {
        if v.is_empty() {
            return 0.0;
        }
        let h = (v.len() - 1) as f64 * p;
        let lo = h.floor() as usize;
        let hi = (lo + 1).min(v.len() - 1);
        v[lo] + (h - lo as f64) * (v[hi] - v[lo])
    };
    Percentiles { p2_5: q(0.025), p50: q(0.5), p97_5: q(0.975) }
}

/// How the linear predictor maps to a rate.
#[derive(Debug, Clone, Copy)]
enum Scale {
    /// The response is the rate itself; negative predictions are clamped to 0.
    Identity,
    /// The response is the log of the rate; the rate is `exp(η)·smearing`.
    Log { smearing: f64 },
}

impl Scale {
    /// The rate for a linear predictor, and whether it was clamped.
    fn rate(self, eta: f64) -> (f64, bool) {
        match self {
            Scale::Identity => {
                if eta < 0.0 {
                    (0.0, true)
                } else {
                    (eta, false)
                }
            }
            Scale::Log { smearing } => {
                let r = eta.exp() * smearing;
                if r.is_finite() { (r, false) } else { (f64::MAX, true) }
            }
        }
    }
}

/// Checks the district inputs and returns them in key order.
fn prepare_districts(districts: &[DistrictInput]) -> Result<Vec<DistrictInput>> {
    if districts.is_empty() {
        return Err(EngineError::EmptyInput);
    }
    let mut seen = HashSet::new();
    for d in districts {
        if !seen.insert(d.key.as_str()) {
            return Err(EngineError::DuplicateKey { key: d.key.clone() });
        }
        if !(d.residents.is_finite() && d.residents > 0.0) {
            return Err(EngineError::BadAllocationInput {
                key: d.key.clone(),
                reason: format!("residents must be a positive number, not {}", d.residents),
            });
        }
        if !(d.observed.is_finite() && d.observed >= 0.0) {
            return Err(EngineError::BadAllocationInput {
                key: d.key.clone(),
                reason: format!("observed incidents must be zero or more, not {}", d.observed),
            });
        }
    }
    let mut sorted = districts.to_vec();
    sorted.sort_by(|a, b| a.key.cmp(&b.key));
    Ok(sorted)
}

/// The design row of each district and where it comes from.
fn model_rows(
    model: &ExpectedModel<'_>,
    districts: &[DistrictInput],
) -> Result<Vec<(Vec<f64>, ExpectedSource)>> {
    let design = model.fit.design();
    let p = model.fit.nparams();
    let fitted: HashMap<&str, usize> =
        design.keys().iter().enumerate().map(|(i, k)| (k.as_str(), i)).collect();
    let extra: HashMap<&str, &Vec<f64>> = model.extra_rows.iter().map(|(k, r)| (k.as_str(), r)).collect();
    let dropped: HashMap<&str, &str> =
        design.dropped().iter().map(|d| (d.key.as_str(), d.reason.as_str())).collect();
    let mut out = Vec::with_capacity(districts.len());
    for d in districts {
        let key = d.key.as_str();
        let row = if let Some(&i) = fitted.get(key) {
            (design.x().row(i), ExpectedSource::Fitted)
        } else if let Some(r) = extra.get(key) {
            if r.len() != p {
                return Err(EngineError::DimensionMismatch {
                    what: format!("number of design values supplied for {key}"),
                    expected: p,
                    found: r.len(),
                });
            }
            if r.iter().any(|v| !v.is_finite()) {
                return Err(EngineError::BadAllocationInput {
                    key: key.to_owned(),
                    reason: "its design row holds a value that is not a finite number".to_owned(),
                });
            }
            ((*r).clone(), ExpectedSource::OutOfFit)
        } else {
            let why = match dropped.get(key) {
                Some(reason) => format!("it was left out of the fit ({reason})"),
                None => "it is not in the model's data".to_owned(),
            };
            return Err(EngineError::NoExpected { key: key.to_owned(), why });
        };
        out.push(row);
    }
    Ok(out)
}

/// Expected incidents for one coefficient vector, with a flag per district whose rate was clamped.
fn expected_for(
    rows: &[(Vec<f64>, ExpectedSource)],
    beta: &[f64],
    residents: &[f64],
    unit: f64,
    scale: Scale,
) -> (Vec<f64>, Vec<bool>) {
    rows.iter()
        .zip(residents)
        .map(|((x, _), &r)| {
            let eta: f64 = x.iter().zip(beta).map(|(a, b)| a * b).sum();
            let (rate, clamped) = scale.rate(eta);
            (rate * r / unit, clamped)
        })
        .unzip()
}

/// Makes the allocation: shares under every basis, the proposal with floors, caps and rounding,
/// the comparison with this year's budget, the sensitivity to the basis and the simulated ranges.
///
/// # Errors
/// Bad inputs (empty, duplicate keys, non-positive residents, negative incidents), bad blend
/// weights, infeasible floors and caps, a basis that is zero everywhere, a district without a
/// model prediction, a response transform other than the log, a bad rate unit or bad simulation
/// options.
pub fn allocate(
    districts: &[DistrictInput],
    budgets: &[BudgetRow],
    model: &ExpectedModel<'_>,
    opts: &AllocationOptions,
) -> Result<Allocation> {
    // Validate.
    validate_basis(&opts.basis)?;
    let ds = prepare_districts(districts)?;
    let n = ds.len();
    check_bounds(n, opts.total, opts.floor, opts.cap)?;
    let sim = opts.simulation;
    if !(MIN_DRAWS..=MAX_DRAWS).contains(&sim.draws) {
        return Err(EngineError::BadSimulationOption {
            option: "draws".to_owned(),
            reason: format!("{} draws were asked for; use between {MIN_DRAWS} and {MAX_DRAWS}", sim.draws),
        });
    }
    if !(model.rate_unit.is_finite() && model.rate_unit > 0.0) {
        return Err(EngineError::BadSimulationOption {
            option: "rate unit".to_owned(),
            reason: format!("the rate unit must be a positive number, not {}", model.rate_unit),
        });
    }
    let transform = model.fit.design().spec().response_transform;
    let scale = match transform {
        None => Scale::Identity,
        Some(Transform::Log) | Some(Transform::Power(0.0)) => {
            // Duan (1983) smearing: the mean of exp(residual), held fixed at its estimate.
            let e = model.fit.residuals();
            let smearing = e.iter().map(|v| v.exp()).sum::<f64>() / e.len() as f64;
            Scale::Log { smearing }
        }
        Some(t) => {
            return Err(EngineError::UnsupportedResponseTransform { label: t.label("rate") });
        }
    };
    let mut budget_map: BTreeMap<&str, u64> = BTreeMap::new();
    for b in budgets {
        if budget_map.insert(b.key.as_str(), b.amount).is_some() {
            return Err(EngineError::DuplicateKey { key: b.key.clone() });
        }
    }
    let rows = model_rows(model, &ds)?;

    // Point shares under every basis.
    let residents: Vec<f64> = ds.iter().map(|d| d.residents).collect();
    let observed: Vec<f64> = ds.iter().map(|d| d.observed).collect();
    let beta = model.fit.coefficients();
    let (expected, clamped) = expected_for(&rows, beta, &residents, model.rate_unit, scale);
    let pop_s = shares_of(&residents, "population")?;
    let obs_s = shares_of(&observed, "observed")?;
    let exp_s = shares_of(&expected, "expected")?;
    let proposal_s = combine(&opts.basis, &pop_s, &obs_s, &exp_s);

    // Bounds as vectors (whole units and reals).
    let total = opts.total as f64;
    let floors_u: Vec<u64> = vec![opts.floor.unwrap_or(0); n];
    let caps_u: Vec<u64> = vec![opts.cap.unwrap_or(u64::MAX); n];
    let floors: Vec<f64> = floors_u.iter().map(|&v| v as f64).collect();
    let caps: Vec<f64> =
        caps_u.iter().map(|&v| if v == u64::MAX { f64::INFINITY } else { v as f64 }).collect();
    let place = |s: &[f64]| -> (Vec<f64>, Vec<BoundStatus>, Vec<u64>) {
        let (a, st) = water_fill(s, total, &floors, &caps);
        let w = largest_remainder(&a, opts.total, &floors_u, &caps_u);
        (a, st, w)
    };
    let (unrounded, status, amounts) = place(&proposal_s);
    let (_, _, pop_a) = place(&pop_s);
    let (_, _, obs_a) = place(&obs_s);
    let (_, _, exp_a) = place(&exp_s);

    // Sensitivity across the pure bases.
    let pure: [(Basis, &Vec<f64>, &Vec<u64>); 3] = [
        (Basis::Population, &pop_s, &pop_a),
        (Basis::Observed, &obs_s, &obs_a),
        (Basis::Expected, &exp_s, &exp_a),
    ];
    let mut comparisons = Vec::new();
    for (i, j) in [(0, 1), (0, 2), (1, 2)] {
        let (bi, si, ai) = pure[i];
        let (bj, sj, aj) = pure[j];
        let diffs: Vec<f64> = (0..n).map(|k| 100.0 * (si[k] - sj[k]).abs()).collect();
        let mut max_k = 0;
        for k in 1..n {
            if diffs[k] > diffs[max_k] + TIE_PP {
                max_k = k;
            }
        }
        let moved: u128 = (0..n).map(|k| u128::from(ai[k].abs_diff(aj[k]))).sum::<u128>() / 2;
        comparisons.push(BasisComparison {
            first: bi,
            second: bj,
            max_abs_pp: diffs[max_k],
            max_key: ds[max_k].key.clone(),
            mean_abs_pp: diffs.iter().sum::<f64>() / n as f64,
            amount_moved: u64::try_from(moved).unwrap_or(u64::MAX),
        });
    }
    let ranges: Vec<(f64, f64)> = (0..n)
        .map(|k| {
            let v = [pop_s[k], obs_s[k], exp_s[k]];
            (
                v.iter().copied().fold(f64::INFINITY, f64::min),
                v.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            )
        })
        .collect();
    let range_pp: Vec<f64> = ranges.iter().map(|(lo, hi)| 100.0 * (hi - lo)).collect();
    let sensitivity = Sensitivity {
        comparisons,
        max_range_pp: range_pp.iter().copied().fold(0.0, f64::max),
        mean_range_pp: range_pp.iter().sum::<f64>() / n as f64,
    };

    // Simulation of the coefficient distribution.
    let sim_basis = if opts.basis.uses_model() { opts.basis } else { Basis::Expected };
    let (factor, factor_kind) = covariance_factor(model.fit.covariance())?;
    let p = beta.len();
    let mut normal = Normal::new(sim.seed);
    let mut exp_draws = vec![Vec::with_capacity(sim.draws); n];
    let mut share_draws = vec![Vec::with_capacity(sim.draws); n];
    let mut amount_draws = vec![Vec::with_capacity(sim.draws); n];
    let mut clamped_draws = 0usize;
    let mut zero_draws = 0usize;
    let mut z = vec![0.0; p];
    let mut b = vec![0.0; p];
    for _ in 0..sim.draws {
        z.iter_mut().for_each(|v| *v = normal.next());
        for (i, bi) in b.iter_mut().enumerate() {
            *bi = beta[i] + (0..p).map(|k| factor.get(i, k) * z[k]).sum::<f64>();
        }
        let (e, c) = expected_for(&rows, &b, &residents, model.rate_unit, scale);
        clamped_draws += c.iter().filter(|&&x| x).count();
        let es = match shares_of(&e, "expected") {
            Ok(s) => s,
            Err(_) => {
                // Every district clamped to zero in this draw: the expected basis is undefined.
                zero_draws += 1;
                continue;
            }
        };
        let s = combine(&sim_basis, &pop_s, &obs_s, &es);
        let (a, _) = water_fill(&s, total, &floors, &caps);
        for k in 0..n {
            exp_draws[k].push(e[k]);
            share_draws[k].push(s[k]);
            amount_draws[k].push(a[k]);
        }
    }
    let share_ranges: Vec<Percentiles> = share_draws.iter().map(|v| percentiles(v)).collect();
    let max_share_width_pp = share_ranges.iter().map(|p| 100.0 * (p.p97_5 - p.p2_5)).fold(0.0, f64::max);
    let uncertainty = Uncertainty {
        seed: sim.seed,
        draws: sim.draws,
        basis: sim_basis,
        factor: factor_kind,
        clamped_draws,
        max_share_width_pp,
        districts: (0..n)
            .map(|k| {
                let amount = percentiles(&amount_draws[k]);
                DistrictRange {
                    key: ds[k].key.clone(),
                    expected: percentiles(&exp_draws[k]),
                    basis_share: share_ranges[k],
                    amount,
                    share: Percentiles {
                        p2_5: amount.p2_5 / total,
                        p50: amount.p50 / total,
                        p97_5: amount.p97_5 / total,
                    },
                }
            })
            .collect(),
    };

    // Rows, with this year's budget.
    let blend = matches!(opts.basis, Basis::Blend(_));
    let district_keys: HashSet<&str> = ds.iter().map(|d| d.key.as_str()).collect();
    let out: Vec<DistrictAllocation> = (0..n)
        .map(|k| {
            let current = budget_map.get(ds[k].key.as_str()).copied();
            let change = current
                .map(|c| amounts[k] as i128 - c as i128)
                .map(|d| d.clamp(i64::MIN as i128, i64::MAX as i128) as i64);
            let percent_change = match (current, change) {
                (Some(c), Some(d)) if c > 0 => Some(100.0 * d as f64 / c as f64),
                _ => None,
            };
            DistrictAllocation {
                key: ds[k].key.clone(),
                residents: residents[k],
                observed: observed[k],
                expected: expected[k],
                expected_source: rows[k].1,
                expected_clamped: clamped[k],
                shares: BasisShares {
                    population: pop_s[k],
                    observed: obs_s[k],
                    expected: exp_s[k],
                    blend: blend.then_some(proposal_s[k]),
                },
                amounts_by_basis: BasisAmounts {
                    population: pop_a[k],
                    observed: obs_a[k],
                    expected: exp_a[k],
                },
                share_min: ranges[k].0,
                share_max: ranges[k].1,
                share_range_pp: range_pp[k],
                unrounded_amount: unrounded[k],
                amount: amounts[k],
                bound: status[k],
                current: current.map_or(CurrentBudget::NoCurrentBudget, CurrentBudget::Amount),
                change,
                percent_change,
            }
        })
        .collect();
    let unmatched_budgets: Vec<BudgetRow> = budget_map
        .iter()
        .filter(|(k, _)| !district_keys.contains(*k))
        .map(|(k, &amount)| BudgetRow { key: (*k).to_owned(), amount })
        .collect();

    // Notes.
    let mut notes = vec![
        "The allocation divides prevention and service funding among areas; it says nothing about any resident."
            .to_owned(),
        format!(
            "Shares under each basis are shown side by side: between bases a district's share moves by up to {:.2} \
             percentage points (mean {:.2}), while the model's uncertainty gives a 95% range at most {:.2} points \
             wide. Compare the two before reading the proposal as driven by the model.",
            sensitivity.max_range_pp, sensitivity.mean_range_pp, max_share_width_pp
        ),
        format!(
            "Amounts are rounded to whole units by the largest-remainder method, so they sum exactly to {}.",
            opts.total
        ),
        format!(
            "Ranges come from {} draws of the coefficients (seed {}), with floors and caps applied in each draw; \
             they are percentiles of the simulated values, not rescaled interval bounds.",
            sim.draws, sim.seed
        ),
    ];
    if !opts.basis.uses_model() {
        notes.push(format!(
            "The {} basis does not use the model, so the proposal carries no model uncertainty; the ranges shown are \
             those of the expected-incidents basis.",
            opts.basis.name()
        ));
    }
    let no_budget: Vec<&str> =
        out.iter().filter(|d| d.current == CurrentBudget::NoCurrentBudget).map(|d| d.key.as_str()).collect();
    if !no_budget.is_empty() {
        notes.push(format!("No current budget: {}.", no_budget.join(", ")));
    }
    if !unmatched_budgets.is_empty() {
        let keys: Vec<&str> = unmatched_budgets.iter().map(|b| b.key.as_str()).collect();
        notes.push(format!("Budget rows that match no district: {}.", keys.join(", ")));
    }
    let out_of_fit: Vec<&str> = out
        .iter()
        .filter(|d| d.expected_source == ExpectedSource::OutOfFit)
        .map(|d| d.key.as_str())
        .collect();
    if !out_of_fit.is_empty() {
        notes.push(format!(
            "Not among the fitted rows; expected incidents predicted from their indicator values: {}.",
            out_of_fit.join(", ")
        ));
    }
    let clamped_keys: Vec<&str> = out.iter().filter(|d| d.expected_clamped).map(|d| d.key.as_str()).collect();
    if !clamped_keys.is_empty() {
        notes.push(format!(
            "The model predicts a negative rate for {}; expected incidents there are set to 0.",
            clamped_keys.join(", ")
        ));
    }
    if clamped_draws > 0 {
        notes.push(format!(
            "In the simulation, {clamped_draws} district-draws predicted a negative rate and were set to 0."
        ));
    }
    if zero_draws > 0 {
        notes.push(format!(
            "{zero_draws} draws predicted no incidents anywhere and were left out of the ranges."
        ));
    }
    let smearing = match scale {
        Scale::Log { smearing } => {
            notes.push(format!(
                "The model's response is the log of the rate; rates are exp(prediction) times Duan's smearing factor \
                 {smearing:.4}, which is held fixed at its estimate in the simulation."
            ));
            smearing
        }
        Scale::Identity => 1.0,
    };
    if factor_kind == CovarianceFactor::Eigen {
        notes.push(
            "The coefficient covariance is only semi-definite; draws were made from its eigendecomposition."
                .to_owned(),
        );
    }

    Ok(Allocation {
        settings: AllocationSettings {
            total: opts.total,
            basis: opts.basis,
            floor: opts.floor,
            cap: opts.cap,
            rate_unit: model.rate_unit,
            response_transform: transform,
            smearing,
            simulation: sim,
        },
        districts: out,
        sensitivity,
        uncertainty,
        unmatched_budgets,
        notes,
    })
}

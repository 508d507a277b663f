//! Allocation scenarios: largest-remainder rounding, feasibility messages, water-filling, blend
//! weights, the sensitivity summary on a hand case, the seeded coefficient simulation and the
//! invented Larkmoor demo.

use std::path::PathBuf;

use wardcast_engine::allocation::{
    AllocationOptions, Basis, BlendWeights, BoundStatus, BudgetRow, CovarianceFactor, CurrentBudget,
    DistrictInput, ExpectedModel, ExpectedSource, SimulationOptions, allocate, check_bounds,
    covariance_factor, largest_remainder, validate_basis, water_fill,
};
use wardcast_engine::{
    Column, Design, EngineError, Exclusion, Fit, FitOptions, Matrix, ModelSpec, Predictor, PredictorValue,
    Table, Transform,
};

use super::common::assert_close;

/// One largest-remainder case: the weights, the total, optional uniform bounds, the expected
/// whole amounts.
struct RoundCase {
    what: &'static str,
    weights: &'static [f64],
    total: u64,
    floor: u64,
    cap: u64,
    expected: &'static [u64],
}

/// Turns weights into quotas (`total·wᵢ/Σw`), rounds them, and compares.
fn check_round(c: &RoundCase) {
    let sum: f64 = c.weights.iter().sum();
    let quotas: Vec<f64> = c.weights.iter().map(|w| c.total as f64 * w / sum).collect();
    let n = quotas.len();
    let got = largest_remainder(&quotas, c.total, &vec![c.floor; n], &vec![c.cap; n]);
    assert_eq!(got, c.expected, "{}", c.what);
    assert_eq!(got.iter().sum::<u64>(), c.total, "{}: sum", c.what);
}

#[test]
fn largest_remainder_hand_worked() {
    // Hamilton's method as defined in Balinski & Young 2001, Fair Representation (2nd ed.),
    // ch. 2: each gets the integer part of its quota, and the units left over go to the largest
    // fractional parts. The quotas below were worked by hand.
    let cases = [
        // Quotas 4.2, 2.1, 0.7: integer parts 4 + 2 + 0 = 6; one unit left goes to 0.7.
        RoundCase {
            what: "6:3:1 into 7",
            weights: &[6.0, 3.0, 1.0],
            total: 7,
            floor: 0,
            cap: u64::MAX,
            expected: &[4, 2, 1],
        },
        // Quotas 5.5, 3.3, 2.2: integer parts sum to 10; the unit goes to 0.5.
        RoundCase {
            what: "50:30:20 into 11",
            weights: &[50.0, 30.0, 20.0],
            total: 11,
            floor: 0,
            cap: u64::MAX,
            expected: &[6, 3, 2],
        },
        // Quotas 3⅓ each: one unit left, a three-way tie broken in key order.
        RoundCase {
            what: "tie into 10",
            weights: &[1.0, 1.0, 1.0],
            total: 10,
            floor: 0,
            cap: u64::MAX,
            expected: &[4, 3, 3],
        },
        // Quotas 2.6, 2.6, 2.6, 2.2 of 10: integer parts 8, two units to the first two 0.6s.
        RoundCase {
            what: "13:13:13:11 into 10",
            weights: &[13.0, 13.0, 13.0, 11.0],
            total: 10,
            floor: 0,
            cap: u64::MAX,
            expected: &[3, 3, 2, 2],
        },
        // Exact quotas leave nothing to distribute.
        RoundCase {
            what: "exact",
            weights: &[1.0, 3.0],
            total: 400,
            floor: 0,
            cap: u64::MAX,
            expected: &[100, 300],
        },
        // Quotas 5, 3.5, 2.5 of 11 within bounds [2, 5]: the first stays at its cap and the
        // tie between the two halves goes to the earlier key.
        RoundCase {
            what: "bounded",
            weights: &[10.0, 7.0, 5.0],
            total: 11,
            floor: 2,
            cap: 5,
            expected: &[5, 4, 2],
        },
    ];
    for c in &cases {
        check_round(c);
    }
}

#[test]
fn largest_remainder_sums_exactly_on_awkward_quotas() {
    // Thirds, sevenths and a long tail: the amounts must always sum exactly to the total.
    for total in [1_u64, 7, 100, 999, 1_000_003, 4_500_000] {
        let weights: Vec<f64> = (1..=37).map(|i| 1.0 / f64::from(i) + f64::from(i % 7) / 3.0).collect();
        let sum: f64 = weights.iter().sum();
        let quotas: Vec<f64> = weights.iter().map(|w| total as f64 * w / sum).collect();
        let got = largest_remainder(&quotas, total, &[0; 37], &[u64::MAX; 37]);
        assert_eq!(got.iter().sum::<u64>(), total, "total {total}");
        for (q, g) in quotas.iter().zip(&got) {
            assert!(
                (*g as f64 - q).abs() < 1.0,
                "total {total}: {g} is not within one unit of its quota {q}"
            );
        }
    }
}

/// Asserts `|a − b| ≤ tol` (an absolute tolerance), naming the quantity.
fn assert_within(what: &str, a: f64, b: f64, tol: f64) {
    assert!(a.is_finite() && (a - b).abs() <= tol, "{what}: got {a}, expected {b} within {tol}");
}

/// The message of the error `r` must be exactly `msg`.
fn check_err<T: std::fmt::Debug>(r: Result<T, EngineError>, msg: &str) {
    match r {
        Ok(v) => panic!("expected the error \"{msg}\", got {v:?}"),
        Err(e) => assert_eq!(e.to_string(), msg),
    }
}

#[test]
fn infeasible_floors_and_caps() {
    // (districts, total, floor, cap, message or None when feasible)
    type BoundCase = (usize, u64, Option<u64>, Option<u64>, Option<&'static str>);
    let cases: [BoundCase; 7] = [
        (
            4,
            100,
            Some(5),
            Some(3),
            Some("the floor of 5 is above the cap of 3, so no district can meet both"),
        ),
        (
            4,
            100,
            Some(30),
            None,
            Some(
                "a floor of 30 for each of 4 districts needs 120, which is more than the total of 100; lower the floor \
                 or raise the total",
            ),
        ),
        (
            4,
            100,
            None,
            Some(20),
            Some(
                "a cap of 20 for each of 4 districts allows at most 80, which is less than the total of 100; raise the \
                 cap or lower the total",
            ),
        ),
        // The boundaries themselves are feasible: every district exactly at its floor or cap.
        (4, 100, Some(25), None, None),
        (4, 100, None, Some(25), None),
        (4, 100, Some(25), Some(25), None),
        (4, 100, None, None, None),
    ];
    for (n, total, floor, cap, msg) in cases {
        match msg {
            Some(m) => check_err(check_bounds(n, total, floor, cap), m),
            None => check_bounds(n, total, floor, cap).expect("feasible bounds"),
        }
    }
}

/// One water-filling case, worked by hand.
struct FillCase {
    what: &'static str,
    shares: &'static [f64],
    total: f64,
    floor: f64,
    cap: f64,
    expected: &'static [f64],
    status: &'static [BoundStatus],
}

fn check_fill(c: &FillCase) {
    let n = c.shares.len();
    let (amounts, status) = water_fill(c.shares, c.total, &vec![c.floor; n], &vec![c.cap; n]);
    for (i, (a, e)) in amounts.iter().zip(c.expected).enumerate() {
        assert_close(&format!("{} amount {i}", c.what), *a, *e, 1e-12, 1.0);
    }
    assert_eq!(status, c.status, "{}", c.what);
    assert_close(&format!("{} sum", c.what), amounts.iter().sum(), c.total, 1e-12, 1.0);
}

#[test]
fn water_filling_hand_cases() {
    use BoundStatus::{AtCap, AtFloor, Free};
    let cases = [
        // Shares 0.5/0.3/0.15/0.05 of 1000 within [100, 400], worked by hand:
        // round 1: 500, 300, 150, 50; 100 over the cap against 50 under the floor, so the cap
        //          side is clamped: the first district gets 400;
        // round 2: 600 left for shares 0.3/0.15/0.05: 360, 180, 60; only the floor side is
        //          violated: the last gets 100;
        // round 3: 500 left for 0.3/0.15: 333.33…, 166.66…; stable.
        FillCase {
            what: "cap then floor",
            shares: &[0.5, 0.3, 0.15, 0.05],
            total: 1000.0,
            floor: 100.0,
            cap: 400.0,
            expected: &[400.0, 1000.0 / 3.0, 500.0 / 3.0, 100.0],
            status: &[AtCap, Free, Free, AtFloor],
        },
        // Shares 0.7/0.1/0.1/0.1 of 100 within [20, 60]: round 1 gives 70, 10, 10, 10 (10 over,
        // 30 under), so only floors are clamped: 20 each, and the first gets the remaining 40,
        // below its cap. Clamping both sides at once would have given 60 + 3·20 = 120 ≠ 100.
        FillCase {
            what: "floors win",
            shares: &[0.7, 0.1, 0.1, 0.1],
            total: 100.0,
            floor: 20.0,
            cap: 60.0,
            expected: &[40.0, 20.0, 20.0, 20.0],
            status: &[Free, AtFloor, AtFloor, AtFloor],
        },
        // No bound binds: proportional shares.
        FillCase {
            what: "free",
            shares: &[0.25, 0.75],
            total: 80.0,
            floor: 0.0,
            cap: f64::INFINITY,
            expected: &[20.0, 60.0],
            status: &[Free, Free],
        },
    ];
    for c in &cases {
        check_fill(c);
    }
    // Rounding the first case keeps the bounds and the sum: 400, 333, 167, 100.
    let (a, _) = water_fill(cases[0].shares, 1000.0, &[100.0; 4], &[400.0; 4]);
    assert_eq!(largest_remainder(&a, 1000, &[100; 4], &[400; 4]), [400, 333, 167, 100]);
}

#[test]
fn water_filling_is_a_clamped_proportional_split() {
    // On seeded random cases, the result must be clamp(λ·sᵢ, floor, cap) for one λ: free
    // districts share one ratio amount/share, districts at the cap would get at least the cap at
    // that ratio and districts at the floor at most the floor (common practice, no published
    // source: this is the defining property of proportional allocation with bounds).
    use rand::{Rng, SeedableRng};
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(42);
    let mut unif = move || (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
    let (mut at_cap, mut at_floor) = (0, 0);
    for case in 0..200 {
        let n = 3 + case % 20;
        let raw: Vec<f64> = (0..n).map(|_| 0.01 + unif() * unif() * 10.0).collect();
        let sum: f64 = raw.iter().sum();
        let shares: Vec<f64> = raw.iter().map(|v| v / sum).collect();
        let total = 1_000_000.0;
        let floor = (unif() * 0.9 * total / n as f64).floor();
        let cap = (total / n as f64 * (1.05 + 2.0 * unif())).ceil();
        let (a, status) = water_fill(&shares, total, &vec![floor; n], &vec![cap; n]);
        assert_close(&format!("case {case} sum"), a.iter().sum(), total, 1e-12, 1.0);
        let free: Vec<usize> = (0..n).filter(|&i| status[i] == BoundStatus::Free).collect();
        at_cap += status.iter().filter(|&&b| b == BoundStatus::AtCap).count();
        at_floor += status.iter().filter(|&&b| b == BoundStatus::AtFloor).count();
        let Some(&f0) = free.first() else { continue };
        let lambda = a[f0] / shares[f0];
        for i in 0..n {
            let target = lambda * shares[i];
            match status[i] {
                BoundStatus::Free => {
                    assert_close(&format!("case {case} free {i}"), a[i], target, 1e-9, 1.0);
                    assert!(a[i] >= floor - 1e-6 && a[i] <= cap + 1e-6, "case {case}: {i} within bounds");
                }
                BoundStatus::AtCap => assert!(target >= cap - 1e-6 && a[i] == cap, "case {case}: {i} at cap"),
                BoundStatus::AtFloor => {
                    assert!(target <= floor + 1e-6 && a[i] == floor, "case {case}: {i} at floor")
                }
            }
        }
    }
    assert!(at_cap > 50 && at_floor > 50, "both bounds bind often: {at_cap} caps, {at_floor} floors");
}

#[test]
fn blend_weights_validation() {
    let blend =
        |population, observed, expected| Basis::Blend(BlendWeights { population, observed, expected });
    validate_basis(&blend(0.2, 0.3, 0.5)).expect("weights summing to 1");
    validate_basis(&blend(0.0, 0.0, 1.0)).expect("a corner of the simplex");
    validate_basis(&Basis::Population).expect("a pure basis");
    let tail = "; give each basis a weight between 0 and 1 so that they sum to 1";
    let cases = [
        (
            blend(0.5, 0.5, 0.1),
            format!("the blend weights are not usable: the weights sum to 1.1, not 1{tail}"),
        ),
        (
            blend(-0.2, 0.6, 0.6),
            format!(
                "the blend weights are not usable: the population weight is -0.2; each weight must lie between 0 and 1{tail}"
            ),
        ),
        (
            blend(0.0, f64::NAN, 1.0),
            format!(
                "the blend weights are not usable: the observed weight is NaN; each weight must lie between 0 and 1{tail}"
            ),
        ),
        (
            blend(0.0, 0.0, 1.5),
            format!(
                "the blend weights are not usable: the expected weight is 1.5; each weight must lie between 0 and 1{tail}"
            ),
        ),
    ];
    for (b, msg) in cases {
        check_err(validate_basis(&b), &msg);
    }
}

/// A four-district exact fit: rate = 10 + 10·x per 1,000 residents, so the expected incidents
/// are known by hand (30, 20, 30, 20).
fn hand_fit() -> Fit {
    let x = Matrix::from_columns(&[vec![2.0, 0.0, 0.0, -0.5]]);
    let y = vec![30.0, 10.0, 10.0, 5.0];
    let keys = ["A", "B", "C", "D"].map(String::from).to_vec();
    let d = Design::from_matrix(x, y, None, vec!["x".into()], keys, true).expect("design");
    Fit::new(&d, &FitOptions::default()).expect("fit")
}

fn hand_districts() -> Vec<DistrictInput> {
    // Deliberately out of key order: results come back in key order.
    [("D", 4000.0, 6.0), ("A", 1000.0, 4.0), ("C", 3000.0, 6.0), ("B", 2000.0, 4.0)]
        .map(|(k, r, o)| DistrictInput { key: k.into(), residents: r, observed: o })
        .to_vec()
}

fn options(total: u64, basis: Basis) -> AllocationOptions {
    AllocationOptions {
        total,
        basis,
        floor: None,
        cap: None,
        simulation: SimulationOptions { draws: 200, seed: 11 },
    }
}

#[test]
fn sensitivity_hand_case() {
    // Shares by hand: population 0.1/0.2/0.3/0.4, observed 0.2/0.2/0.3/0.3, expected
    // 0.3/0.2/0.3/0.2 (rates 30, 10, 10, 5 per 1,000 times 1, 2, 3, 4 thousand residents).
    let fit = hand_fit();
    let model = ExpectedModel { fit: &fit, rate_unit: 1000.0, extra_rows: vec![] };
    let budgets = [("A", 250), ("B", 200), ("D", 400), ("Z", 999)]
        .map(|(k, a)| BudgetRow { key: k.into(), amount: a })
        .to_vec();
    let a =
        allocate(&hand_districts(), &budgets, &model, &options(1000, Basis::Expected)).expect("allocation");
    let rows = a.districts();
    let keys: Vec<&str> = rows.iter().map(|r| r.key.as_str()).collect();
    assert_eq!(keys, ["A", "B", "C", "D"]);
    let expect = [
        // key, population, observed, expected share, range pp, amount, current, change, % change
        ("A", 0.1, 0.2, 0.3, 20.0, 300, Some(250), Some(50), Some(20.0)),
        ("B", 0.2, 0.2, 0.2, 0.0, 200, Some(200), Some(0), Some(0.0)),
        ("C", 0.3, 0.3, 0.3, 0.0, 300, None, None, None),
        ("D", 0.4, 0.3, 0.2, 20.0, 200, Some(400), Some(-200), Some(-50.0)),
    ];
    for (r, (key, ps, os, es, range, amount, current, change, pct)) in rows.iter().zip(expect) {
        assert_eq!(r.key, key);
        assert_close(&format!("{key} population share"), r.shares.population, ps, 1e-9, 1.0);
        assert_close(&format!("{key} observed share"), r.shares.observed, os, 1e-9, 1.0);
        assert_close(&format!("{key} expected share"), r.shares.expected, es, 1e-9, 1.0);
        assert_close(&format!("{key} range"), r.share_range_pp, range, 1e-9, 1.0);
        assert_eq!(r.amount, amount, "{key} amount");
        assert_eq!(r.current, current.map_or(CurrentBudget::NoCurrentBudget, CurrentBudget::Amount), "{key}");
        assert_eq!(r.change, change, "{key} change");
        match (r.percent_change, pct) {
            (Some(g), Some(e)) => assert_close(&format!("{key} percent change"), g, e, 1e-12, 1.0),
            (g, e) => assert_eq!(g, e, "{key} percent change"),
        }
        assert_eq!(r.expected_source, ExpectedSource::Fitted);
    }
    let amounts: Vec<[u64; 3]> = rows
        .iter()
        .map(|r| [r.amounts_by_basis.population, r.amounts_by_basis.observed, r.amounts_by_basis.expected])
        .collect();
    assert_eq!(amounts, [[100, 200, 300], [200, 200, 200], [300, 300, 300], [400, 300, 200]]);
    // Pairwise: |Δshare| in pp per district, worked by hand from the shares above.
    let s = a.sensitivity();
    let expect_pairs = [
        (Basis::Population, Basis::Observed, 10.0, "A", 5.0, 100),
        (Basis::Population, Basis::Expected, 20.0, "A", 10.0, 200),
        (Basis::Observed, Basis::Expected, 10.0, "A", 5.0, 100),
    ];
    assert_eq!(s.comparisons.len(), 3);
    for (c, (first, second, max_pp, max_key, mean_pp, moved)) in s.comparisons.iter().zip(expect_pairs) {
        assert_eq!((c.first, c.second), (first, second));
        assert_close("max pp", c.max_abs_pp, max_pp, 1e-9, 1.0);
        assert_eq!(c.max_key, max_key);
        assert_close("mean pp", c.mean_abs_pp, mean_pp, 1e-9, 1.0);
        assert_eq!(c.amount_moved, moved);
    }
    assert_close("max range", s.max_range_pp, 20.0, 1e-9, 1.0);
    assert_close("mean range", s.mean_range_pp, 10.0, 1e-9, 1.0);
    let unmatched: Vec<&str> = a.unmatched_budgets().iter().map(|b| b.key.as_str()).collect();
    assert_eq!(unmatched, ["Z"]);
    assert!(a.notes().iter().any(|n| n == "No current budget: C."));
    // The fit is exact, so the covariance is zero: every draw equals the point values.
    assert_eq!(a.uncertainty().factor, CovarianceFactor::Eigen);
    assert_eq!(a.uncertainty().max_share_width_pp, 0.0);
    for (r, u) in rows.iter().zip(&a.uncertainty().districts) {
        for v in [u.share.p2_5, u.share.p50, u.share.p97_5] {
            assert_close(&format!("{} simulated share", r.key), v, r.shares.expected, 1e-9, 1.0);
        }
    }
    // A blend reports its own share: 0.2·pop + 0.3·obs + 0.5·exp for A = 0.02 + 0.06 + 0.15.
    let blend = Basis::Blend(BlendWeights { population: 0.2, observed: 0.3, expected: 0.5 });
    let b = allocate(&hand_districts(), &budgets, &model, &options(1000, blend)).expect("blend");
    assert_close("blend share of A", b.districts()[0].shares.blend.expect("blend share"), 0.23, 1e-9, 1.0);
    assert_eq!(b.districts().iter().map(|r| r.amount).sum::<u64>(), 1000);
}

#[test]
fn allocation_errors_are_plain() {
    let fit = hand_fit();
    let model = ExpectedModel { fit: &fit, rate_unit: 1000.0, extra_rows: vec![] };
    let mut opts = options(1000, Basis::Population);
    opts.floor = Some(300);
    check_err(
        allocate(&hand_districts(), &[], &model, &opts),
        "a floor of 300 for each of 4 districts needs 1200, which is more than the total of 1000; lower the floor or \
         raise the total",
    );
    let mut ds = hand_districts();
    ds.push(DistrictInput { key: "E".into(), residents: 500.0, observed: 1.0 });
    check_err(
        allocate(&ds, &[], &model, &options(1000, Basis::Population)),
        "district E has no model-expected incidents because it is not in the model's data; supply its indicator values \
         or leave it out of the allocation",
    );
    ds[4].residents = 0.0;
    check_err(
        allocate(&ds, &[], &model, &options(1000, Basis::Population)),
        "district E: residents must be a positive number, not 0",
    );
    let zero: Vec<DistrictInput> =
        hand_districts().into_iter().map(|d| DistrictInput { observed: 0.0, ..d }).collect();
    check_err(
        allocate(&zero, &[], &model, &options(1000, Basis::Population)),
        "the observed basis is zero in every district, so it cannot divide the total",
    );
    let mut few = options(1000, Basis::Expected);
    few.simulation.draws = 10;
    check_err(
        allocate(&hand_districts(), &[], &model, &few),
        "the allocation option draws is not usable: 10 draws were asked for; use between 100 and 100000",
    );
}

#[test]
fn covariance_factor_handles_semidefinite() {
    // A rank-one covariance [[1, 1], [1, 1]] has no Cholesky factor; the eigen route must still
    // reproduce it. A clearly indefinite matrix is refused.
    let c = Matrix::from_rows(&[vec![1.0, 1.0], vec![1.0, 1.0]]);
    let (a, how) = covariance_factor(&c).expect("semi-definite");
    assert_eq!(how, CovarianceFactor::Eigen);
    let back = a.matmul(&a.transpose());
    for i in 0..2 {
        for j in 0..2 {
            assert_close("A·Aᵀ", back.get(i, j), c.get(i, j), 1e-12, 1.0);
        }
    }
    let pd = Matrix::from_rows(&[vec![4.0, 2.0], vec![2.0, 3.0]]);
    let (l, how) = covariance_factor(&pd).expect("definite");
    assert_eq!(how, CovarianceFactor::Cholesky);
    assert_close("L11", l.get(0, 0), 2.0, 1e-15, 1.0);
    assert_close("L21", l.get(1, 0), 1.0, 1e-15, 1.0);
    assert_close("L22", l.get(1, 1), 2.0_f64.sqrt(), 1e-15, 1.0);
    let bad = Matrix::from_rows(&[vec![1.0, 2.0], vec![2.0, 1.0]]);
    assert!(matches!(covariance_factor(&bad), Err(EngineError::NotPositiveSemidefinite { .. })));
}

/// Twelve invented districts with a noisy linear rate, for the simulation tests.
fn noisy_fit(log: bool) -> (Fit, Vec<DistrictInput>) {
    let keys: Vec<String> = (1..=12).map(|i| format!("D{i:02}")).collect();
    let x: Vec<f64> = (0..12).map(|i| f64::from(i) * 0.8 + 1.0).collect();
    // A fixed zig-zag stands in for noise so the fit is not exact.
    let noise = [1.5, -2.0, 0.7, 2.4, -1.1, -0.3, 1.9, -2.6, 0.4, 1.2, -1.7, 0.9];
    let rate: Vec<f64> = x.iter().zip(noise).map(|(v, e)| 20.0 + 3.0 * v + e).collect();
    let residents: Vec<f64> = (0..12).map(|i| 3000.0 + 1700.0 * f64::from((i * 7) % 12)).collect();
    let table = Table::new(keys.clone(), vec![Column::from_f64("rate", &rate), Column::from_f64("x", &x)])
        .expect("table");
    let mut spec = ModelSpec::new("rate", &["x"]);
    if log {
        spec.response_transform = Some(Transform::Log);
    }
    let d = Design::build(&table, &spec).expect("design");
    let fit = Fit::new(&d, &FitOptions::default()).expect("fit");
    let ds = keys
        .iter()
        .zip(&residents)
        .zip(&rate)
        .map(|((k, r), q)| DistrictInput {
            key: k.clone(),
            residents: *r,
            observed: (q * r / 10_000.0).round(),
        })
        .collect();
    (fit, ds)
}

#[test]
fn simulation_is_reproducible_and_centred() {
    let (fit, ds) = noisy_fit(false);
    let model = ExpectedModel { fit: &fit, rate_unit: 10_000.0, extra_rows: vec![] };
    let mut opts = options(1_000_000, Basis::Expected);
    opts.simulation = SimulationOptions { draws: 4000, seed: 20_250_417 };
    let a = allocate(&ds, &[], &model, &opts).expect("allocation");
    let again = allocate(&ds, &[], &model, &opts).expect("allocation");
    assert_eq!(a.uncertainty(), again.uncertainty(), "same seed, same ranges");
    assert_eq!((a.uncertainty().seed, a.uncertainty().draws), (20_250_417, 4000));
    opts.simulation.seed = 1;
    let other = allocate(&ds, &[], &model, &opts).expect("allocation");
    assert_ne!(a.uncertainty().districts, other.uncertainty().districts, "another seed, other draws");

    // The expected incidents of a draw are x'β*·residents/unit with x'β* ~ N(x'b, se_mean²), so
    // their 2.5 and 97.5 percentiles must be close to fit ∓ 1.96·se_mean from Fit::predict
    // (normal quantile 1.959964, standard tables). Monte Carlo error with 4000 draws is a few
    // per cent of the width.
    let rows = Matrix::from_rows(&(0..fit.nobs()).map(|i| fit.design().x().row(i)).collect::<Vec<_>>());
    let preds = fit.predict(&rows, None, 0.95).expect("predict");
    for ((r, u), p) in a.districts().iter().zip(&a.uncertainty().districts).zip(&preds) {
        let k = r.residents / 10_000.0;
        let half = 1.959_964 * p.se_mean * k;
        assert_close(&format!("{} expected", r.key), r.expected, p.fit * k, 1e-12, 1.0);
        assert_within(&format!("{} 2.5%", r.key), u.expected.p2_5, p.fit * k - half, 0.08 * half);
        assert_within(&format!("{} 97.5%", r.key), u.expected.p97_5, p.fit * k + half, 0.08 * half);
        // The median share sits close to the point share, inside the range.
        let width = u.share.p97_5 - u.share.p2_5;
        assert!(width > 0.0, "{}: the range has width", r.key);
        assert!(
            u.share.p2_5 <= r.shares.expected && r.shares.expected <= u.share.p97_5,
            "{}: point inside",
            r.key
        );
        assert_within(&format!("{} median share", r.key), u.share.p50, r.shares.expected, 0.1 * width);
    }
    assert_eq!(a.districts().iter().map(|r| r.amount).sum::<u64>(), 1_000_000);
    // The summary width is the widest of the per-district ranges.
    let widest = a
        .uncertainty()
        .districts
        .iter()
        .map(|u| 100.0 * (u.basis_share.p97_5 - u.basis_share.p2_5))
        .fold(0.0, f64::max);
    assert!(widest > 0.0);
    assert_close("widest range", a.uncertainty().max_share_width_pp, widest, 1e-12, 1.0);
}

#[test]
fn log_response_is_back_transformed_with_smearing() {
    let (fit, ds) = noisy_fit(true);
    let model = ExpectedModel { fit: &fit, rate_unit: 10_000.0, extra_rows: vec![] };
    let a = allocate(&ds, &[], &model, &options(500_000, Basis::Expected)).expect("allocation");
    // Duan (1983): the smearing factor is the mean of exp(residual) on the log scale.
    let smear = fit.residuals().iter().map(|e| e.exp()).sum::<f64>() / fit.residuals().len() as f64;
    assert_close("smearing", a.settings().smearing, smear, 1e-12, 1.0);
    for (i, r) in a.districts().iter().enumerate() {
        let want = fit.fitted()[i].exp() * smear * r.residents / 10_000.0;
        assert_close(&format!("{} expected", r.key), r.expected, want, 1e-12, 1.0);
    }
    assert!(a.notes().iter().any(|n| n.contains("smearing")));
}

/// Reads a simple unquoted CSV into a header and rows of fields.
fn read_csv(name: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../demo").join(name);
    let text =
        std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    let mut lines = text.lines().filter(|l| !l.trim().is_empty());
    let header = lines.next().expect("header").split(',').map(String::from).collect();
    let rows = lines.map(|l| l.split(',').map(String::from).collect()).collect();
    (header, rows)
}

#[test]
fn larkmoor_demo_allocation() {
    let (header, rows) = read_csv("larkmoor_districts.csv");
    let col =
        |name: &str| header.iter().position(|h| h == name).unwrap_or_else(|| panic!("no column {name}"));
    let num = |r: &Vec<String>, name: &str| -> Option<f64> { r[col(name)].parse().ok() };
    let keys: Vec<String> = rows.iter().map(|r| r[col("district_code")].clone()).collect();
    let residents: Vec<f64> = rows.iter().map(|r| num(r, "residents").expect("residents")).collect();
    let assaults: Vec<f64> = rows.iter().map(|r| num(r, "assaults").expect("assaults")).collect();
    let rate: Vec<f64> = assaults.iter().zip(&residents).map(|(a, r)| a / r * 10_000.0).collect();
    let indicators = ["unemployment_pct", "vacancy_pct", "youth_share_pct", "alcohol_outlets_per_1k"];
    let mut columns = vec![Column::from_f64("assault_rate_per_10k", &rate)];
    columns.extend(indicators.iter().map(|c| Column::numeric(*c, rows.iter().map(|r| num(r, c)).collect())));
    let table = Table::new(keys.clone(), columns).expect("table");
    let mut spec = ModelSpec::new("assault_rate_per_10k", &[]);
    spec.predictors = vec![
        Predictor::new("unemployment_pct"),
        Predictor::transformed("vacancy_pct", Transform::Log),
        Predictor::new("youth_share_pct"),
        Predictor::new("alcohol_outlets_per_1k"),
    ];
    spec.exclusions =
        vec![Exclusion { key: "LK-47".into(), reason: "event crowds from outside the district".into() }];
    let design = Design::build(&table, &spec).expect("design");
    let fit = Fit::new(&design, &FitOptions::default()).expect("fit");

    let districts: Vec<DistrictInput> = keys
        .iter()
        .zip(&residents)
        .zip(&assaults)
        .map(|((k, r), a)| DistrictInput { key: k.clone(), residents: *r, observed: *a })
        .collect();
    let (bh, brows) = read_csv("larkmoor_budgets.csv");
    assert_eq!(bh[..2], ["district_code", "programme_budget"]);
    let budgets: Vec<BudgetRow> = brows
        .iter()
        .map(|r| BudgetRow { key: r[0].clone(), amount: r[1].parse().expect("amount") })
        .collect();
    let total: u64 = budgets.iter().map(|b| b.amount).sum();
    let opts = AllocationOptions {
        total,
        basis: Basis::Blend(BlendWeights { population: 0.5, observed: 0.0, expected: 0.5 }),
        floor: Some(30_000),
        cap: Some(140_000),
        simulation: SimulationOptions { draws: 500, seed: 7 },
    };

    // The excluded arena quarter has all its values, so its row can be supplied; LK-12 lacks
    // vacancy_pct, and the allocation says so rather than inventing a prediction.
    let arena = rows.iter().find(|r| r[0] == "LK-47").expect("LK-47");
    let values: Vec<(String, PredictorValue)> = indicators
        .iter()
        .map(|c| ((*c).to_owned(), PredictorValue::Number(num(arena, c).expect("value"))))
        .collect();
    let arena_row = design.row_for_prediction(&values).expect("arena row");
    let model =
        ExpectedModel { fit: &fit, rate_unit: 10_000.0, extra_rows: vec![("LK-47".into(), arena_row)] };
    check_err(
        allocate(&districts, &budgets, &model, &opts),
        "district LK-12 has no model-expected incidents because it was left out of the fit (missing value in \
         vacancy_pct); supply its indicator values or leave it out of the allocation",
    );
    let kept: Vec<DistrictInput> = districts.into_iter().filter(|d| d.key != "LK-12").collect();
    let a = allocate(&kept, &budgets, &model, &opts).expect("allocation");
    let out = a.districts();
    assert_eq!(out.len(), 63);
    assert_eq!(out.iter().map(|r| r.amount).sum::<u64>(), total, "amounts sum exactly to the total");
    assert!(out.windows(2).all(|w| w[0].key < w[1].key), "rows in key order");
    for r in out {
        assert!((30_000..=140_000).contains(&r.amount), "{} amount {} within bounds", r.key, r.amount);
    }
    let none: Vec<&str> =
        out.iter().filter(|r| r.current == CurrentBudget::NoCurrentBudget).map(|r| r.key.as_str()).collect();
    assert_eq!(none, ["LK-07", "LK-58"], "districts without a budget row are kept and marked");
    let unmatched: Vec<&str> = a.unmatched_budgets().iter().map(|b| b.key.as_str()).collect();
    assert_eq!(unmatched, ["LK-12", "LK-65", "LK-7A"], "budget rows that match no allocated district");
    let arena = out.iter().find(|r| r.key == "LK-47").expect("arena");
    assert_eq!(arena.expected_source, ExpectedSource::OutOfFit);
    assert!(a.sensitivity().max_range_pp > 0.0);
    // Every amount and range is a finite number.
    for (r, u) in out.iter().zip(&a.uncertainty().districts) {
        assert_eq!(r.key, u.key);
        for v in [u.amount.p2_5, u.amount.p50, u.amount.p97_5, u.share.p50, r.unrounded_amount] {
            assert!(v.is_finite(), "{}: finite values", r.key);
        }
        assert!(
            u.amount.p2_5 >= 30_000.0 - 1e-6 && u.amount.p97_5 <= 140_000.0 + 1e-6,
            "{}: bounds in draws",
            r.key
        );
    }
}

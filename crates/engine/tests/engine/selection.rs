//! Model selection: best subsets against brute-force QR over every subset and against the
//! statsmodels fixture, LOO through PRESS against explicit refits, folds, cancellation, nested
//! tests, the drop-one table and the recommendation.

use std::collections::HashMap;
use std::sync::atomic::{AtomicBool, Ordering};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use wardcast_engine::data::{Column, ColumnData, Table};
use wardcast_engine::selection::{
    Candidates, CvOptions, DropOneOptions, GroupColumn, SearchMethod, SearchOptions, Statistics,
    SubsetSearch, TIE_TOLERANCE, best_subsets, cross_validate, drop_one, make_folds, partial_f_test,
    rank_with_ties, recommend,
};
use wardcast_engine::{Design, EngineError, Fit, FitOptions, Matrix, ModelSpec, Predictor, Transform};

use super::common::{assert_close, fixture, nums, rows};

/// Standard normal draws from a seeded ChaCha8 stream (Box–Muller).
struct Gauss(ChaCha8Rng);

impl Gauss {
    fn new(seed: u64) -> Self {
        Gauss(ChaCha8Rng::seed_from_u64(seed))
    }
    fn uniform(&mut self) -> f64 {
        ((self.0.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn next(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }
    fn vec(&mut self, n: usize) -> Vec<f64> {
        (0..n).map(|_| self.next()).collect()
    }
}

fn keys(n: usize) -> Vec<String> {
    (0..n).map(|i| format!("r{i:03}")).collect()
}

/// One brute-force reference model: every statistic from the core's `Fit`.
#[derive(Debug, Clone)]
struct Reference {
    terms: Vec<usize>,
    sse: f64,
    r2: f64,
    adj: f64,
    aic: f64,
    bic: f64,
    press: f64,
    params: usize,
}

/// Fits every subset of the design's terms with `Fit` (pivoted QR), skipping aliased ones.
/// Returns the models by size (terms, forced included) and the aliased count per size.
fn brute_force(design: &Design, forced: &[usize]) -> (Vec<Vec<Reference>>, Vec<u64>) {
    let p = design.terms().len();
    let free: Vec<usize> = (0..p).filter(|t| !forced.contains(t)).collect();
    let mut by_size: Vec<Vec<Reference>> = vec![Vec::new(); p + 1];
    let mut aliased = vec![0u64; p + 1];
    for mask in 0u64..(1 << free.len()) {
        let mut terms: Vec<usize> = forced.to_vec();
        terms.extend(free.iter().enumerate().filter(|(q, _)| mask >> q & 1 == 1).map(|(_, &t)| t));
        terms.sort_unstable();
        let d = design.select_terms(&terms);
        match Fit::new(&d, &FitOptions::default()) {
            Ok(f) => {
                let w = d.weights();
                let press: f64 = f
                    .residuals()
                    .iter()
                    .zip(f.leverages())
                    .enumerate()
                    .map(|(i, (e, h))| w.map_or(1.0, |w| w[i]) * (e / (1.0 - h)).powi(2))
                    .sum();
                by_size[terms.len()].push(Reference {
                    terms: terms.clone(),
                    sse: f.sse(),
                    r2: f.r_squared(),
                    adj: f.adj_r_squared(),
                    aic: f.aic(),
                    bic: f.bic(),
                    press,
                    params: f.nparams(),
                });
            }
            Err(EngineError::Aliased { .. }) => aliased[terms.len()] += 1,
            Err(e) => panic!("unexpected error for {terms:?}: {e}"),
        }
    }
    // Exact ties (models spanning the same columns) are ordered by term list, the documented rule.
    let sst = Fit::new(&design.select_terms(&[]), &FitOptions::default()).unwrap().ssto();
    for v in &mut by_size {
        rank_with_ties(v, TIE_TOLERANCE * sst, |r| (r.sse, r.terms.as_slice()));
    }
    (by_size, aliased)
}

/// The Cp reference MSE: the full model, or terms left out one at a time (the one holding the
/// aliased column `Fit` names, forced terms first in the order) until the model is full rank.
fn reference_mse(design: &Design, forced: &[usize]) -> f64 {
    let p = design.terms().len();
    let mut terms: Vec<usize> = forced.to_vec();
    terms.extend((0..p).filter(|t| !forced.contains(t)));
    loop {
        match Fit::new(&design.select_terms(&terms), &FitOptions::default()) {
            Ok(f) => return f.mse(),
            Err(EngineError::Aliased { column, .. }) => {
                let pos = terms
                    .iter()
                    .position(|&t| {
                        design.terms()[t].columns.clone().any(|j| design.column_names()[j] == column)
                    })
                    .expect("the aliased column belongs to a term");
                terms.remove(pos);
            }
            Err(e) => panic!("{e}"),
        }
    }
}

/// Checks a search against the brute force: identical top-`top` lists per size, statistics to
/// 1e-9 relative, aliased counts per size (exhaustive search only).
fn check(design: &Design, forced: &[usize], top: usize, method: SearchMethod, what: &str) {
    let cands = Candidates::from_design(design).expect("candidates");
    let opts = SearchOptions { top, forced: forced.to_vec(), method, ..SearchOptions::default() };
    let search = best_subsets(&cands, &opts).expect("search");
    let (reference, aliased) = brute_force(design, forced);
    let mse = reference_mse(design, forced);
    let n = design.nrows() as f64;
    assert_eq!(search.sizes().len(), design.terms().len() + 1 - forced.len(), "{what}: sizes");
    for sb in search.sizes() {
        let want: Vec<&Reference> = reference[sb.size()].iter().take(top).collect();
        let got: Vec<Vec<usize>> = sb.models().iter().map(|m| m.terms().to_vec()).collect();
        let exp: Vec<Vec<usize>> = want.iter().map(|r| r.terms.clone()).collect();
        assert_eq!(got, exp, "{what} ({method:?}): best models of size {}", sb.size());
        if method == SearchMethod::Exhaustive {
            assert_eq!(sb.aliased(), aliased[sb.size()], "{what}: aliased models of size {}", sb.size());
        }
        assert!(sb.aliased_on_refit().is_empty(), "{what}: fast path and refit disagree on aliasing");
        for (m, r) in sb.models().iter().zip(&want) {
            let tag = format!("{what} {:?}", r.terms);
            assert_close(&format!("{tag} sse"), m.sse(), r.sse, 1e-9, 0.0);
            assert_close(&format!("{tag} r2"), m.r_squared(), r.r2, 1e-9, 1.0);
            assert_close(&format!("{tag} adj r2"), m.adj_r_squared(), r.adj, 1e-9, 1.0);
            assert_close(&format!("{tag} aic"), m.aic().expect("aic"), r.aic, 1e-9, 1.0);
            assert_close(&format!("{tag} sbc"), m.sbc().expect("sbc"), r.bic, 1e-9, 1.0);
            assert_close(&format!("{tag} press"), m.press().expect("press"), r.press, 1e-9, 0.0);
            // Mallows (1973): Cp = SSE_p / σ̂² − (n − 2p).
            let cp = r.sse / mse - (n - 2.0 * r.params as f64);
            assert_close(&format!("{tag} cp"), m.cp().expect("cp"), cp, 1e-9, 1.0);
        }
    }
}

/// A random table with `p` numeric candidates; `tweak` edits the columns before `y` is made.
fn numeric_design(seed: u64, n: usize, p: usize, tweak: impl Fn(&mut Vec<Vec<f64>>, &mut Gauss)) -> Design {
    let mut g = Gauss::new(seed);
    let mut cols: Vec<Vec<f64>> = (0..p).map(|_| g.vec(n)).collect();
    tweak(&mut cols, &mut g);
    let beta = [1.5, -1.0, 0.8, 0.0, 0.5, 0.0, -0.3, 0.2, 0.0, 0.1, 0.0, 0.05];
    let y: Vec<f64> = (0..n)
        .map(|i| 3.0 + (0..p).map(|j| beta[j % beta.len()] * cols[j][i]).sum::<f64>() + 1.2 * g.next())
        .collect();
    let names = (0..p).map(|j| format!("x{j}")).collect();
    Design::from_matrix(Matrix::from_columns(&cols), y, None, names, keys(n), true).expect("design")
}

#[test]
fn best_subsets_match_brute_force_on_well_conditioned_data() {
    let d = numeric_design(11, 60, 11, |_, _| {});
    check(&d, &[], 5, SearchMethod::Exhaustive, "plain");
    check(&d, &[], 5, SearchMethod::LeapsAndBounds, "plain");
    check(&d, &[2, 7], 3, SearchMethod::LeapsAndBounds, "plain, forced");
    check(&d, &[2, 7], 3, SearchMethod::Exhaustive, "plain, forced");
    // The ranking-only mode gives the same lists and SSEs, without PRESS.
    let c = Candidates::from_design(&d).unwrap();
    let full = best_subsets(&c, &SearchOptions::default()).unwrap();
    let fast =
        best_subsets(&c, &SearchOptions { statistics: Statistics::RankingOnly, ..SearchOptions::default() })
            .unwrap();
    for (a, b) in full.models().zip(fast.models()) {
        assert_eq!(a.terms(), b.terms());
        assert_close("ranking-only sse", b.sse(), a.sse(), 1e-12, 0.0);
        assert_eq!(b.press(), None);
    }
}

#[test]
fn best_subsets_match_brute_force_on_ill_conditioned_columns() {
    let d = numeric_design(12, 50, 11, |c, g| {
        // x3 is x1 plus a perturbation of relative size 1e-6 (condition number about 10⁶), x5 has
        // a large offset and scale, and x8 is nearly x0 + x2.
        let z = g.vec(c[0].len());
        c[3] = c[1].iter().zip(&z).map(|(a, b)| a + 1e-6 * b).collect();
        c[5] = c[5].iter().map(|v| 5e4 + 1e3 * v).collect();
        let z = g.vec(c[0].len());
        c[8] = (0..c[0].len()).map(|i| c[0][i] + c[2][i] + 1e-5 * z[i]).collect();
    });
    check(&d, &[], 5, SearchMethod::Exhaustive, "ill-conditioned");
    check(&d, &[], 5, SearchMethod::LeapsAndBounds, "ill-conditioned");
}

#[test]
fn best_subsets_skip_exactly_collinear_subsets() {
    let d = numeric_design(13, 45, 11, |c, _| {
        // x4 = x1 + x2 and x9 = 2·x5 − x6 exactly; every subset holding either set is aliased.
        c[4] = c[1].iter().zip(&c[2]).map(|(a, b)| a + b).collect();
        c[9] = c[5].iter().zip(&c[6]).map(|(a, b)| 2.0 * a - b).collect();
    });
    check(&d, &[], 5, SearchMethod::Exhaustive, "collinear");
    check(&d, &[], 5, SearchMethod::LeapsAndBounds, "collinear");
    let s = best_subsets(&Candidates::from_design(&d).unwrap(), &SearchOptions::default()).unwrap();
    assert!(s.counts().aliased > 0);
    assert!(
        s.cp_reference().note().is_some_and(|n| n.contains("largest full-rank model")),
        "{:?}",
        s.cp_reference()
    );
    assert!(!s.cp_reference().left_out().is_empty());
}

/// A table with a three-level categorical predictor (two dummies that move together), weights
/// and ten numeric candidates.
fn mixed_design(seed: u64, n: usize) -> Design {
    let mut g = Gauss::new(seed);
    let cols: Vec<Vec<f64>> = (0..10).map(|_| g.vec(n)).collect();
    let level = |i: usize| ["core", "mixed", "outer"][i % 3].to_owned();
    let w: Vec<f64> = (0..n).map(|_| 0.5 + 2.0 * g.uniform()).collect();
    let y: Vec<f64> = (0..n)
        .map(|i| 2.0 + cols[0][i] - 0.7 * cols[3][i] + 0.4 * cols[6][i] + [0.0, 1.0, -0.5][i % 3] + g.next())
        .collect();
    let mut columns: Vec<Column> = cols
        .iter()
        .enumerate()
        .map(|(j, c)| Column {
            name: format!("x{j}"),
            data: ColumnData::Numeric(c.iter().map(|&v| Some(v)).collect()),
        })
        .collect();
    columns.push(Column {
        name: "kind".into(),
        data: ColumnData::Text((0..n).map(|i| Some(level(i))).collect()),
    });
    columns.push(Column { name: "y".into(), data: ColumnData::Numeric(y.into_iter().map(Some).collect()) });
    columns.push(Column { name: "pop".into(), data: ColumnData::Numeric(w.into_iter().map(Some).collect()) });
    let table = Table::new(keys(n), columns).expect("table");
    let mut spec = ModelSpec::new("y", &["x0", "x1", "x2", "x3", "x4"]);
    spec.predictors.insert(2, Predictor::categorical("kind", "core"));
    spec.predictors.extend(["x5", "x6", "x7", "x8", "x9"].map(Predictor::new));
    spec.weights = Some("pop".into());
    Design::build(&table, &spec).expect("design")
}

#[test]
fn best_subsets_keep_categorical_dummies_together_under_weights() {
    let d = mixed_design(14, 70);
    assert_eq!(d.terms()[2].columns.len(), 2, "kind spans two dummies");
    check(&d, &[], 5, SearchMethod::Exhaustive, "categorical, weighted");
    check(&d, &[], 5, SearchMethod::LeapsAndBounds, "categorical, weighted");
    check(&d, &[2], 4, SearchMethod::LeapsAndBounds, "categorical forced, weighted");
}

#[test]
fn best_subsets_match_the_statsmodels_fixture() {
    // Source: tests/fixtures/selection/all_subsets.json (statsmodels OLS of all 255 subsets;
    // PRESS from hat values; Cp against the full model's MSE).
    let fx = fixture("selection/all_subsets.json");
    let names: Vec<String> =
        fx["names"].as_array().unwrap().iter().map(|v| v.as_str().unwrap().to_owned()).collect();
    let x = rows(&fx["x"]);
    let y = nums(&fx["y"]);
    let n = y.len();
    let cols: Vec<Vec<f64>> = (0..names.len()).map(|j| x.iter().map(|r| r[j]).collect()).collect();
    let d = Design::from_matrix(Matrix::from_columns(&cols), y, None, names.clone(), keys(n), true).unwrap();
    let cands = Candidates::from_design(&d).unwrap();
    let s = best_subsets(&cands, &SearchOptions { top: 70, ..SearchOptions::default() }).unwrap();
    let by_terms: HashMap<Vec<String>, _> = s.models().map(|m| (m.labels().to_vec(), m)).collect();
    let exp = &fx["expected"];
    assert_close("mse_full", s.cp_reference().mse().unwrap(), exp["mse_full"].as_f64().unwrap(), 1e-9, 0.0);
    let subsets = exp["subsets"].as_array().unwrap();
    assert_eq!(subsets.len(), 255);
    for sub in subsets {
        let vars: Vec<String> =
            sub["vars"].as_array().unwrap().iter().map(|v| v.as_str().unwrap().to_owned()).collect();
        let m = by_terms.get(&vars).unwrap_or_else(|| panic!("{vars:?} not reported"));
        let f = |k: &str| sub[k].as_f64().unwrap();
        assert_eq!(m.params(), sub["p"].as_u64().unwrap() as usize);
        assert_close(&format!("{vars:?} ssr"), m.sse(), f("ssr"), 1e-9, 0.0);
        assert_close(&format!("{vars:?} rsquared"), m.r_squared(), f("rsquared"), 1e-9, 0.0);
        assert_close(&format!("{vars:?} rsquared_adj"), m.adj_r_squared(), f("rsquared_adj"), 1e-9, 0.0);
        assert_close(&format!("{vars:?} aic"), m.aic().unwrap(), f("aic"), 1e-9, 0.0);
        assert_close(&format!("{vars:?} bic"), m.sbc().unwrap(), f("bic"), 1e-9, 0.0);
        assert_close(&format!("{vars:?} press"), m.press().unwrap(), f("press"), 1e-9, 0.0);
        assert_close(&format!("{vars:?} cp"), m.cp().unwrap(), f("cp"), 1e-9, 1.0);
    }
    // Leave-one-out: the fixture's explicit refits against PRESS of the full model.
    let full = s.sizes().last().unwrap().models()[0].clone();
    let loo = &exp["loo_full"];
    assert_close("loo press", full.press().unwrap(), loo["press"].as_f64().unwrap(), 1e-9, 0.0);
    assert_close("loo rmse", full.loo_rmse(n as f64).unwrap(), loo["rmse"].as_f64().unwrap(), 1e-9, 0.0);
}

#[test]
fn press_equals_explicit_leave_one_out_refits() {
    for d in [numeric_design(21, 40, 5, |_, _| {}), mixed_design(22, 45)] {
        let cands = Candidates::from_design(&d).unwrap();
        let s = best_subsets(&cands, &SearchOptions { top: 2, ..SearchOptions::default() }).unwrap();
        for m in s.models().filter(|m| !m.terms().is_empty()) {
            let sub = d.select_terms(m.terms());
            let mut press = 0.0;
            for (i, key) in sub.keys().iter().enumerate() {
                let fit =
                    Fit::new(&sub.without_rows(std::slice::from_ref(key)).unwrap(), &FitOptions::default())
                        .unwrap();
                let pred: f64 = sub.x().row(i).iter().zip(fit.coefficients()).map(|(a, b)| a * b).sum();
                press += sub.weights().map_or(1.0, |w| w[i]) * (sub.y()[i] - pred).powi(2);
            }
            assert_close(&format!("PRESS {:?}", m.labels()), m.press().unwrap(), press, 1e-9, 0.0);
        }
    }
}

#[test]
fn press_is_undefined_when_a_leverage_is_one() {
    // x1 is non-zero in one row only, so that row has leverage 1 in any model holding x1.
    let n = 12;
    let mut g = Gauss::new(31);
    let x0 = g.vec(n);
    let mut x1 = vec![0.0; n];
    x1[4] = 1.0;
    let y: Vec<f64> = (0..n).map(|i| x0[i] + g.next()).collect();
    let d = Design::from_matrix(
        Matrix::from_columns(&[x0, x1]),
        y,
        None,
        vec!["x0".into(), "x1".into()],
        keys(n),
        true,
    )
    .unwrap();
    let s = best_subsets(&Candidates::from_design(&d).unwrap(), &SearchOptions::default()).unwrap();
    let full = &s.sizes()[2].models()[0];
    assert_eq!(full.press(), None);
    assert!(full.press_note().unwrap().contains("r004 has leverage 1"), "{:?}", full.press_note());
    assert!(s.notes().iter().any(|n| n.contains("PRESS is undefined")));
}

#[test]
fn search_states_its_caveats() {
    let d = numeric_design(41, 30, 4, |_, _| {});
    let s: SubsetSearch =
        best_subsets(&Candidates::from_design(&d).unwrap(), &SearchOptions::default()).unwrap();
    assert!(s.notes().iter().any(|n| n.contains("optimistic")));
    assert!(s.notes().iter().any(|n| n.contains("AIC and SBC") && n.contains("original scale")));
    assert_eq!(s.counts().subsets, 16);
    assert_eq!(s.counts().evaluated, 16, "exhaustive search computes every subset");
}

#[test]
fn search_reports_progress_and_can_be_cancelled() {
    let d = numeric_design(51, 80, 16, |_, _| {});
    let cands = Candidates::from_design(&d).unwrap();
    // A raised flag stops the search.
    let stop = AtomicBool::new(true);
    let opts =
        SearchOptions { cancel: Some(&stop), method: SearchMethod::Exhaustive, ..SearchOptions::default() };
    assert_eq!(best_subsets(&cands, &opts).unwrap_err(), EngineError::Cancelled);
    // Raised from the progress callback after the first report.
    let stop = AtomicBool::new(false);
    let seen = std::sync::Mutex::new(Vec::new());
    let progress = |f: f64| {
        seen.lock().unwrap().push(f);
        stop.store(true, Ordering::Relaxed);
    };
    let opts = SearchOptions {
        progress: Some(&progress),
        cancel: Some(&stop),
        method: SearchMethod::Exhaustive,
        ..SearchOptions::default()
    };
    assert_eq!(best_subsets(&cands, &opts).unwrap_err(), EngineError::Cancelled);
    let seen = seen.into_inner().unwrap();
    assert!(!seen.is_empty() && seen[0] > 0.0 && seen[0] < 1.0, "{seen:?}");
    // Without cancelling, progress rises to 1.
    let last = std::sync::Mutex::new(Vec::new());
    let progress = |f: f64| last.lock().unwrap().push(f);
    let opts = SearchOptions { progress: Some(&progress), ..SearchOptions::default() };
    best_subsets(&cands, &opts).unwrap();
    let v = last.into_inner().unwrap();
    assert!(v.windows(2).all(|w| w[0] <= w[1]), "progress never falls");
    assert_eq!(v.last().copied(), Some(1.0));
}

#[test]
fn search_rejects_bad_options() {
    let d = numeric_design(61, 30, 4, |_, _| {});
    let c = Candidates::from_design(&d).unwrap();
    let e = best_subsets(&c, &SearchOptions { top: 0, ..SearchOptions::default() }).unwrap_err();
    assert!(matches!(e, EngineError::BadSearchOption { .. }), "{e}");
    let e = best_subsets(&c, &SearchOptions { forced: vec![1, 1], ..SearchOptions::default() }).unwrap_err();
    assert!(e.to_string().contains("forced in twice"), "{e}");
    let e = best_subsets(
        &c,
        &SearchOptions { forced: vec![0, 1], max_size: Some(1), ..SearchOptions::default() },
    )
    .unwrap_err();
    assert!(e.to_string().contains("smaller than the number of forced terms"), "{e}");
    // The maximum size limits the sizes reported.
    let s = best_subsets(&c, &SearchOptions { max_size: Some(2), ..SearchOptions::default() }).unwrap();
    assert_eq!(s.sizes().iter().map(|s| s.size()).collect::<Vec<_>>(), vec![0, 1, 2]);
}

#[test]
fn folds_are_reproducible_balanced_and_keep_groups_whole() {
    let n = 103;
    let opts = CvOptions { folds: 10, repeats: 3, seed: 7, ..CvOptions::default() };
    let a = make_folds(n, &opts).unwrap();
    assert_eq!(a, make_folds(n, &opts).unwrap(), "same seed, same folds");
    assert_ne!(
        a,
        make_folds(n, &CvOptions { seed: 8, ..opts.clone() }).unwrap(),
        "another seed, other folds"
    );
    for r in &a {
        let mut size = [0usize; 10];
        r.fold_of_row().iter().for_each(|&f| size[f] += 1);
        assert!(size.iter().all(|&s| s == 10 || s == 11), "{size:?}");
    }
    assert_ne!(a[0], a[1], "each repeat draws new folds");
    // Grouped: 23 groups of uneven size.
    let groups: Vec<String> = (0..n).map(|i| format!("g{}", (i * 7 + i / 5) % 23)).collect();
    let g = GroupColumn { label: "borough".into(), values: groups.clone() };
    let a = make_folds(n, &CvOptions { groups: Some(g), ..opts.clone() }).unwrap();
    for r in &a {
        let mut fold_of_group: HashMap<&str, usize> = HashMap::new();
        for (i, &f) in r.fold_of_row().iter().enumerate() {
            let prev = *fold_of_group.entry(groups[i].as_str()).or_insert(f);
            assert_eq!(prev, f, "group {} split between folds", groups[i]);
        }
        assert!((0..10).all(|f| r.fold_of_row().contains(&f)), "every fold is used");
    }
    let few =
        GroupColumn { label: "borough".into(), values: (0..n).map(|i| format!("g{}", i % 4)).collect() };
    let e = make_folds(n, &CvOptions { groups: Some(few), ..opts }).unwrap_err();
    assert_eq!(
        e.to_string(),
        "grouped cross-validation needs at least 10 groups for 10 folds, but borough has only 4"
    );
}

#[test]
fn cross_validation_matches_explicit_fold_fits() {
    let d = mixed_design(71, 90);
    let cands = Candidates::from_design(&d).unwrap();
    let models = vec![vec![0, 2, 3], vec![0, 1, 3, 6]];
    let opts = CvOptions { folds: 5, repeats: 2, seed: 3, ..CvOptions::default() };
    let cv = cross_validate(&cands, &models, &opts).unwrap();
    assert_eq!(cv.assignments().len(), 2);
    for (mi, terms) in models.iter().enumerate() {
        for (r, a) in cv.assignments().iter().enumerate() {
            let (mut sse, mut sae, mut sst, mut ws) = (0.0, 0.0, 0.0, 0.0);
            for f in 0..5 {
                let test: Vec<usize> = (0..d.nrows()).filter(|&i| a.fold_of_row()[i] == f).collect();
                let test_keys: Vec<String> = test.iter().map(|&i| d.keys()[i].clone()).collect();
                let sub = d.select_terms(terms);
                let train = sub.without_rows(&test_keys).unwrap();
                let fit = Fit::new(&train, &FitOptions::default()).unwrap();
                let w = train.weights().unwrap();
                let ybar = train.y().iter().zip(w).map(|(a, b)| a * b).sum::<f64>() / w.iter().sum::<f64>();
                for &i in &test {
                    let pred: f64 = sub.x().row(i).iter().zip(fit.coefficients()).map(|(a, b)| a * b).sum();
                    let wi = d.weights().unwrap()[i];
                    sse += wi * (d.y()[i] - pred).powi(2);
                    sae += wi * (d.y()[i] - pred).abs();
                    sst += wi * (d.y()[i] - ybar).powi(2);
                    ws += wi;
                }
            }
            let m = &cv.models()[mi];
            assert_close("cv rmse", m.rmse_by_repeat()[r], (sse / ws).sqrt(), 1e-10, 0.0);
            assert_close("cv mae", m.mae_by_repeat()[r], sae / ws, 1e-10, 0.0);
            assert_close("cv r2", m.r2_by_repeat()[r], 1.0 - sse / sst, 1e-10, 0.0);
        }
        let s = cv.models()[mi].rmse();
        assert!(s.min <= s.mean && s.mean <= s.max && s.sd >= 0.0);
    }
}

#[test]
fn cross_validation_smears_a_log_response_back_to_the_original_scale() {
    // Duan (1983): E[y | x] ≈ exp(x'β) · mean(exp(eⱼ)) over the training residuals.
    let n = 60;
    let mut g = Gauss::new(81);
    let x = g.vec(n);
    let y: Vec<f64> = (0..n).map(|i| (1.0 + 0.5 * x[i] + 0.4 * g.next()).exp()).collect();
    let ly: Vec<f64> = y.iter().map(|v| v.ln()).collect();
    let d = Design::from_matrix(
        Matrix::from_columns(std::slice::from_ref(&x)),
        ly,
        None,
        vec!["x".into()],
        keys(n),
        true,
    )
    .unwrap();
    let cands = Candidates::from_design(&d).unwrap();
    let opts = CvOptions {
        folds: 4,
        repeats: 1,
        seed: 5,
        response_transform: Some(Transform::Log),
        ..CvOptions::default()
    };
    let cv = cross_validate(&cands, &[vec![0]], &opts).unwrap();
    let a = &cv.assignments()[0];
    let mut sse = 0.0;
    for f in 0..4 {
        let test: Vec<usize> = (0..n).filter(|&i| a.fold_of_row()[i] == f).collect();
        let keys_out: Vec<String> = test.iter().map(|&i| d.keys()[i].clone()).collect();
        let fit = Fit::new(&d.without_rows(&keys_out).unwrap(), &FitOptions::default()).unwrap();
        let smear = fit.residuals().iter().map(|e| e.exp()).sum::<f64>() / fit.residuals().len() as f64;
        let b = fit.coefficients();
        for &i in &test {
            sse += (y[i] - (b[0] + b[1] * x[i]).exp() * smear).powi(2);
        }
    }
    assert_close("smeared rmse", cv.models()[0].rmse_by_repeat()[0], (sse / n as f64).sqrt(), 1e-10, 0.0);
    assert!(cv.notes().iter().any(|n| n.contains("smearing")));
}

#[test]
fn partial_f_test_needs_nested_models() {
    let d = numeric_design(91, 50, 5, |_, _| {});
    let c = Candidates::from_design(&d).unwrap();
    let qr = Default::default();
    let e = partial_f_test(&c, &[0, 1], &[1, 2, 3], &qr).unwrap_err();
    assert_eq!(
        e.to_string(),
        "the models are not nested: x0 + x1 has x0, which x1 + x2 + x3 lacks; a partial F-test compares a model with \
         one that contains all of its terms and more"
    );
    let e = partial_f_test(&c, &[0, 1], &[1, 0], &qr).unwrap_err();
    assert!(e.to_string().contains("have the same terms"), "{e}");
    // Nested, in either order. Kutner et al. (2004) §7.3: F = (ΔSSE/Δdf)/(SSE_l/df_l); it must
    // match the core's partial F for a single term and the direct formula.
    let t = partial_f_test(&c, &[0, 1, 2, 3], &[1, 3], &qr).unwrap();
    assert_eq!(t.added(), ["x0", "x2"]);
    let big = Fit::new(&d.select_terms(&[0, 1, 2, 3]), &FitOptions::default()).unwrap();
    let small = Fit::new(&d.select_terms(&[1, 3]), &FitOptions::default()).unwrap();
    let f = ((small.sse() - big.sse()) / 2.0) / (big.sse() / big.df_resid() as f64);
    assert_close("partial F", t.f().unwrap(), f, 1e-10, 0.0);
    assert_eq!((t.df_num(), t.df_larger()), (2, 45));
    let one = partial_f_test(&c, &[0, 1, 2, 3], &[0, 1, 3], &qr).unwrap();
    let core = big.partial_f_tests().iter().find(|r| r.term == "x2").unwrap();
    assert_close("partial F vs core", one.f().unwrap(), core.f.unwrap(), 1e-9, 0.0);
    assert_close("partial p vs core", one.p_value().unwrap(), core.p.unwrap(), 1e-9, 0.0);
}

#[test]
fn drop_one_table_and_recommendation() {
    let d = mixed_design(95, 80);
    let c = Candidates::from_design(&d).unwrap();
    let cv = CvOptions { folds: 5, repeats: 2, seed: 9, ..CvOptions::default() };
    let t =
        drop_one(&c, &[0, 2, 3, 7], &DropOneOptions { cv: Some(cv.clone()), ..DropOneOptions::default() })
            .unwrap();
    let full = Fit::new(&d.select_terms(&[0, 2, 3, 7]), &FitOptions::default()).unwrap();
    assert_eq!(t.rows().len(), 4);
    for row in t.rows() {
        let core = full.partial_f_tests().iter().find(|r| r.term == row.term()).unwrap();
        assert_close(&format!("drop {} F", row.term()), row.f().unwrap(), core.f.unwrap(), 1e-9, 0.0);
        assert_eq!(row.df(), core.df);
        assert!(row.delta_cv_rmse().is_some());
    }
    let kind = t.rows().iter().find(|r| r.term() == "kind").unwrap();
    assert_eq!(kind.df(), 2, "the categorical term leaves with both dummies");
    let reduced = Fit::new(&d.select_terms(&[0, 3, 7]), &FitOptions::default()).unwrap();
    assert_close("delta AIC", kind.delta_aic().unwrap(), reduced.aic() - full.aic(), 1e-9, 1.0);
    assert_close(
        "delta adj R2",
        kind.delta_adj_r_squared(),
        reduced.adj_r_squared() - full.adj_r_squared(),
        1e-9,
        1.0,
    );

    // The recommendation names the model with the smallest AIC among all subsets.
    let s = best_subsets(&c, &SearchOptions::default()).unwrap();
    let top: Vec<Vec<usize>> = s.models().take(10).map(|m| m.terms().to_vec()).collect();
    let cvr = cross_validate(&c, &top, &cv).unwrap();
    let rec = recommend(&s, Some(&cvr));
    let (by_size, _) = brute_force(&d, &[]);
    let best_aic = by_size.iter().flatten().min_by(|a, b| a.aic.total_cmp(&b.aic)).unwrap();
    let pick =
        rec.picks().iter().find(|p| p.criterion() == wardcast_engine::selection::Criterion::Aic).unwrap();
    assert_eq!(pick.labels(), c.labels(&best_aic.terms).as_slice());
    assert_eq!(rec.picks().len(), 6);
    assert!(rec.explanation().last().unwrap().contains("The choice stays with you"));
    if !rec.agree() {
        assert!(rec.explanation().iter().any(|p| p.contains("ln(n)")));
    }
}

#[test]
fn leaps_and_bounds_agree_with_exhaustive_search_on_correlated_blocks() {
    // 17 candidates: four real effects and thirteen others correlated with them (r 0.3 to 0.9),
    // the structure on which bounds prune most and near-ties are common.
    let n = 240;
    let mut g = Gauss::new(101);
    let real: Vec<Vec<f64>> = (0..4).map(|_| g.vec(n)).collect();
    let mut cols = real.clone();
    for j in 0..13 {
        let r = 0.3 + 0.05 * j as f64;
        let e = g.vec(n);
        cols.push((0..n).map(|i| r * real[j % 4][i] + (1.0 - r * r).sqrt() * e[i]).collect());
    }
    let y: Vec<f64> = (0..n)
        .map(|i| real[0][i] + 0.6 * real[1][i] + 0.3 * real[2][i] + 0.1 * real[3][i] + g.next())
        .collect();
    let names = (0..cols.len()).map(|j| format!("v{j}")).collect();
    let d = Design::from_matrix(Matrix::from_columns(&cols), y, None, names, keys(n), true).unwrap();
    let c = Candidates::from_design(&d).unwrap();
    let run = |method| best_subsets(&c, &SearchOptions { method, ..SearchOptions::default() }).unwrap();
    let (ex, lb) = (run(SearchMethod::Exhaustive), run(SearchMethod::LeapsAndBounds));
    assert!(lb.counts().pruned > 0 && lb.counts().evaluated < ex.counts().evaluated);
    assert_eq!(ex.counts().evaluated, 1 << 17);
    for (a, b) in ex.sizes().iter().zip(lb.sizes()) {
        let ta: Vec<&[usize]> = a.models().iter().map(|m| m.terms()).collect();
        let tb: Vec<&[usize]> = b.models().iter().map(|m| m.terms()).collect();
        assert_eq!(ta, tb, "size {}", a.size());
        for (x, y) in a.models().iter().zip(b.models()) {
            assert_eq!(x.sse().to_bits(), y.sse().to_bits(), "both refits are the same computation");
        }
    }
}

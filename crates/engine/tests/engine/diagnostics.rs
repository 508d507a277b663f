//! Model checks (issue 3) against pinned scipy/statsmodels fixtures, published worked values and
//! hand-checkable synthetic cases, plus the planted structure of the Larkmoor demo.
//!
//! Fixtures: tests/fixtures/diagnostics/*.json, written by tests/generate/make_fixtures.py with
//! numpy 2.3.5, scipy 1.16.3 and statsmodels 0.14.6 (each file names its calls in "source").
//! Tolerances: 1e-8 relative where the formula is exact (the fixture README measures statsmodels
//! against exact rational arithmetic at ≤ 6e-9 on Longley and ≤ 2e-10 elsewhere). Entries whose
//! reference value is tiny next to the rest of their vector (near-zero DFBETAS, residuals) are
//! compared relative to 1e-6 of the vector's largest magnitude, since their own relative error
//! is meaningless. The Shapiro-Wilk p-value tolerance is stated at `SHAPIRO_P_TOL`.

use std::collections::BTreeMap;
use std::path::PathBuf;

use serde_json::Value;
use wardcast_engine::diagnostics::{
    self, CheckOptions, CheckOutcome, Checks, InfluenceBand, PowerFamily, SizeRule, VerdictLevel,
};
use wardcast_engine::{Column, Design, Exclusion, Fit, FitOptions, Matrix, ModelSpec, Table};

/// Relative tolerance where the formula is exact.
const EXACT_TOL: f64 = 1e-8;
/// Relative tolerance of the Shapiro-Wilk p-value. scipy's port of AS R94 evaluates the upper
/// normal tail with algorithm AS 66 (about 1e-9 absolute accuracy, worse in relative terms far
/// in the tail); this engine uses an accurate normal tail. Measured agreement: 4e-11.
const SHAPIRO_P_TOL: f64 = 1e-9;
/// Absolute tolerance of optimiser outputs in the fixtures (λ̂ and interval ends are written by
/// scipy optimisers with about 1e-7 absolute accuracy, per the fixture notes).
const OPTIMISER_TOL: f64 = 2e-6;

fn fixture_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../tests/fixtures/diagnostics")
}

fn load(name: &str) -> Value {
    let path = fixture_dir().join(format!("{name}.json"));
    let text =
        std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
    serde_json::from_str(&text).expect("fixture is valid JSON")
}

fn nums(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(|x| x.as_f64().expect("number")).collect()
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("expected a number, found {v}"))
}

/// Largest relative error seen per quantity, for the report printed by the fixture tests.
#[derive(Default)]
struct Errors(BTreeMap<String, f64>);

impl Errors {
    /// Asserts `got` ≈ `want` within `tol` relative to `max(|want|, floor)` and records the error.
    fn close_floor(&mut self, what: &str, got: f64, want: f64, tol: f64, floor: f64) {
        let denom = want.abs().max(floor).max(f64::MIN_POSITIVE);
        let err = (got - want).abs() / denom;
        assert!(
            got.is_finite() && err <= tol,
            "{what}: got {got:e}, want {want:e} (relative error {err:e} > {tol:e})"
        );
        let e = self.0.entry(what.to_owned()).or_insert(0.0);
        *e = e.max(err);
    }

    fn close(&mut self, what: &str, got: f64, want: f64, tol: f64) {
        self.close_floor(what, got, want, tol, 0.0);
    }

    /// Elementwise comparison of vectors; tiny entries are compared against 1e-6 of the largest.
    fn close_vec(&mut self, what: &str, got: &[f64], want: &[f64], tol: f64) {
        assert_eq!(got.len(), want.len(), "{what}: length");
        let scale = want.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
        for (g, w) in got.iter().zip(want) {
            self.close_floor(what, *g, *w, tol, 1e-6 * scale);
        }
    }

    fn report(&self, case: &str) {
        for (k, v) in &self.0 {
            eprintln!("diagnostics fixture {case}: {k:<32} max rel. error {v:.2e}");
        }
    }
}

/// The fixture's design, fit and full diagnostics report.
struct Case {
    fixture: Value,
    x: Matrix,
    y: Vec<f64>,
    fit: Fit,
    checks: Checks,
}

fn keys(n: usize) -> Vec<String> {
    (0..n).map(|i| format!("r{i}")).collect()
}

fn build(name: &str, opts: &CheckOptions) -> Case {
    let fx = load(name);
    let names: Vec<String> =
        fx["names"].as_array().expect("names").iter().map(|v| v.as_str().expect("name").to_owned()).collect();
    let rows: Vec<Vec<f64>> = fx["x"].as_array().expect("x").iter().map(nums).collect();
    let y = nums(&fx["y"]);
    let x = Matrix::from_rows(&rows);
    assert!(fx["intercept"].as_bool().expect("intercept"), "diagnostics fixtures are all with intercept");
    let design = Design::from_matrix(x.clone(), y.clone(), None, names, keys(y.len()), true).expect("design");
    let fit = Fit::new(&design, &FitOptions::default()).expect("fit");
    let checks = diagnostics::run(&fit, opts);
    Case { fixture: fx, x, y, fit, checks }
}

fn ok<'a, T>(o: &'a CheckOutcome<T>, what: &str) -> &'a T {
    match o {
        CheckOutcome::Ok(v) => v,
        CheckOutcome::Unavailable(r) => panic!("{what} unavailable: {r}"),
    }
}

/// The data-driven check of one diagnostics fixture: every quantity the fixture holds.
fn check(name: &str) {
    // Large-data cut-offs are irrelevant to the fixture values; the default options are used.
    let opts = CheckOptions::default().with_lambda_range(-5.0, 5.0).expect("range");
    let c = build(name, &opts);
    let e = &c.fixture["expected"];
    let mut err = Errors::default();
    let n = c.y.len();

    // Sanity: the fit itself (statsmodels OLS params).
    err.close_vec("params", c.fit.coefficients(), &nums(&e["params"]), EXACT_TOL);

    // Shapiro-Wilk: scipy.stats.shapiro(resid), Royston (1995) AS R94.
    let sw = ok(c.checks.shapiro(), "shapiro");
    err.close("shapiro W", sw.w(), num(&e["shapiro"]["W"]), EXACT_TOL);
    err.close("shapiro p", sw.p_value(), num(&e["shapiro"]["pvalue"]), SHAPIRO_P_TOL);

    // Brown-Forsythe: t² = scipy.stats.levene(lower, upper, center='median').statistic.
    let bf = ok(c.checks.brown_forsythe(), "brown_forsythe");
    let ebf = &e["brown_forsythe"];
    assert_eq!(bf.lower_n(), ebf["n_lower"].as_u64().expect("n_lower") as usize, "lower group size");
    assert_eq!(bf.upper_n(), ebf["n_upper"].as_u64().expect("n_upper") as usize, "upper group size");
    err.close("brown_forsythe median fitted", bf.median_fitted(), num(&ebf["median_fitted"]), EXACT_TOL);
    err.close("brown_forsythe t^2 = levene W", bf.t_squared(), num(&ebf["levene_W"]), EXACT_TOL);
    err.close("brown_forsythe p", bf.p_value(), num(&ebf["levene_p"]), EXACT_TOL);

    // Breusch-Pagan (Koenker): het_breuschpagan(resid, exog, robust=True).
    for (label, outcome, key) in [
        ("bp predictors", c.checks.breusch_pagan_predictors(), "breusch_pagan_predictors"),
        ("bp fitted", c.checks.breusch_pagan_fitted(), "breusch_pagan_fitted"),
    ] {
        let bp = ok(outcome, label);
        err.close(&format!("{label} lm"), bp.lm(), num(&e[key]["lm"]), EXACT_TOL);
        err.close(&format!("{label} lm p"), bp.lm_p_value(), num(&e[key]["lm_pvalue"]), EXACT_TOL);
        err.close(&format!("{label} F"), bp.f(), num(&e[key]["fvalue"]), EXACT_TOL);
        err.close(&format!("{label} F p"), bp.f_p_value(), num(&e[key]["f_pvalue"]), EXACT_TOL);
    }

    // Residuals and influence: statsmodels OLSInfluence.
    let inf = &e["influence"];
    let res = ok(c.checks.residuals(), "residuals");
    err.close_vec("hat", res.hat(), &nums(&inf["hat"]), EXACT_TOL);
    let internal: Vec<f64> = res.internal().iter().map(|v| v.expect("defined")).collect();
    let external: Vec<f64> = res.external().iter().map(|v| v.expect("defined")).collect();
    err.close_vec("student internal", &internal, &nums(&inf["student_resid_internal"]), EXACT_TOL);
    err.close_vec("student external", &external, &nums(&inf["student_resid_external"]), EXACT_TOL);
    let infl = ok(c.checks.influence(), "influence");
    let rows = infl.rows();
    let cooks: Vec<f64> = rows.iter().map(|r| r.cooks_d().expect("cook")).collect();
    err.close_vec("cooks_d", &cooks, &nums(&inf["cooks_d"]), EXACT_TOL);
    // The percentile is 1 − cooks_p; compared absolutely, as a probability.
    for (r, p) in rows.iter().zip(nums(&inf["cooks_p"])) {
        err.close_floor(
            "cooks percentile (abs)",
            r.cooks_percentile().expect("pct"),
            1.0 - p,
            EXACT_TOL,
            1.0,
        );
    }
    let dffits: Vec<f64> = rows.iter().map(|r| r.dffits().expect("dffits")).collect();
    err.close_vec("dffits", &dffits, &nums(&inf["dffits"]), EXACT_TOL);
    let want_dfb: Vec<Vec<f64>> = inf["dfbetas"].as_array().expect("dfbetas").iter().map(nums).collect();
    let p = c.fit.nparams();
    for j in 0..p {
        let got: Vec<f64> = rows.iter().map(|r| r.dfbetas().expect("dfbetas")[j]).collect();
        let want: Vec<f64> = want_dfb.iter().map(|r| r[j]).collect();
        err.close_vec("dfbetas", &got, &want, EXACT_TOL);
    }
    // statsmodels' dffits_threshold is 2·sqrt(p/n), the large-data cut-off.
    let large = build_thresholds(&c, SizeRule::Large);
    err.close("dffits large-data cut-off", large, num(&inf["dffits_threshold"]), EXACT_TOL);

    // Bonferroni outlier test: results.outlier_test(method='bonf').
    let ob = &e["outlier_bonf"];
    let unadj: Vec<f64> = rows.iter().map(|r| r.unadjusted_p().expect("p")).collect();
    let bonf: Vec<f64> = rows.iter().map(|r| r.bonferroni_p().expect("p")).collect();
    let stud: Vec<f64> = rows.iter().map(|r| r.student_external().expect("t")).collect();
    err.close_vec("outlier student resid", &stud, &nums(&ob["student_resid"]), EXACT_TOL);
    err.close_vec("outlier unadjusted p", &unadj, &nums(&ob["unadj_p"]), EXACT_TOL);
    err.close_vec("outlier bonferroni p", &bonf, &nums(&ob["bonf_p"]), EXACT_TOL);

    // VIF: variance_inflation_factor(add_constant(x), j).
    let vifs = ok(c.checks.vif(), "vif");
    for v in vifs {
        err.close("vif", v.vif(), num(&e["vif"][v.name()]), EXACT_TOL);
    }

    // RESET: linear_reset(power=[2, 3], use_f=True) on the standardized response (same F).
    let reset = ok(c.checks.reset(), "reset");
    err.close("reset F", reset.f(), num(&e["reset"]["F"]), EXACT_TOL);
    err.close("reset p", reset.p_value(), num(&e["reset"]["pvalue"]), EXACT_TOL);
    assert_eq!(reset.df_num() as f64, num(&e["reset"]["df_num"]));
    assert_eq!(reset.df_denom() as f64, num(&e["reset"]["df_denom"]));

    // Robust errors: OLS(...).fit(cov_type='HC0'..'HC3').bse.
    let rob = ok(c.checks.robust(), "robust");
    err.close_vec("classical se", rob.classical(), &nums(&e["bse_nonrobust"]), EXACT_TOL);
    err.close_vec("HC0", rob.hc0(), &nums(&e["hc"]["HC0"]), EXACT_TOL);
    err.close_vec("HC1", rob.hc1(), &nums(&e["hc"]["HC1"]), EXACT_TOL);
    err.close_vec("HC2", rob.hc2(), &nums(&e["hc"]["HC2"]), EXACT_TOL);
    err.close_vec("HC3", rob.hc3(), &nums(&e["hc"]["HC3"]), EXACT_TOL);

    // Correlation: numpy.corrcoef.
    let corr = ok(c.checks.correlation(), "correlation");
    for (row, want) in corr.matrix().iter().zip(e["corr"].as_array().expect("corr")) {
        err.close_vec("corr", row, &nums(want), EXACT_TOL);
    }

    // Added-variable plots: slope equals the coefficient (Frisch-Waugh-Lovell).
    for av in c.checks.added_variable() {
        let a = ok(av.outcome(), "added variable");
        err.close("added-variable slope = coefficient", a.slope(), a.coefficient(), EXACT_TOL);
    }

    // Box-Cox regression profile, computed by the generator from its formula with numpy.
    let bc = &e["boxcox_profile"];
    let xi = with_intercept(&c.x);
    for (l, want) in nums(&bc["lambdas"]).into_iter().zip(nums(&bc["llf"])) {
        let got = diagnostics::transform::power_profile_llf(&xi, &c.y, None, l).expect("llf");
        err.close("boxcox profile llf", got, want, EXACT_TOL);
    }
    let prof = ok(c.checks.response_power(), "response power");
    assert_eq!(prof.family(), PowerFamily::BoxCox);
    // A flat profile fixes its maximiser only to about √ε relative (Longley: the 95% interval
    // spans more than 8 units); where the two maximisers differ by more than the optimiser
    // tolerance, ours must reach at least the same height as the fixture's.
    let lam_ref = num(&bc["lambda_max"]);
    if (prof.lambda_hat() - lam_ref).abs() > OPTIMISER_TOL {
        let at_ref = diagnostics::transform::power_profile_llf(&xi, &c.y, None, lam_ref).expect("llf");
        assert!(prof.llf_max() >= at_ref - 1e-13 * at_ref.abs(), "lambda {} vs {lam_ref}", prof.lambda_hat());
        eprintln!(
            "diagnostics fixture {name}: flat profile, lambda_hat {} vs fixture {lam_ref}, heights {} vs {at_ref}",
            prof.lambda_hat(),
            prof.llf_max()
        );
    } else {
        err.close_floor("boxcox lambda_max (abs)", prof.lambda_hat(), lam_ref, OPTIMISER_TOL, 1.0);
    }
    err.close("boxcox llf_max", prof.llf_max(), num(&bc["llf_max"]), EXACT_TOL);
    let ci = bc["ci95"].as_array().expect("ci95");
    for (got, want) in [prof.interval().0, prof.interval().1].into_iter().zip(ci) {
        match want.as_f64() {
            Some(w) => {
                err.close_floor("boxcox ci95 end (abs)", got.expect("interval end"), w, OPTIMISER_TOL, 1.0)
            }
            None => assert!(got.is_none(), "interval end should lie outside the range"),
        }
    }

    // Intercept only: scipy.stats.boxcox_llf and scipy.stats.boxcox's λ.
    let ones = Matrix::from_columns(&[vec![1.0; n]]);
    let io = &e["boxcox_llf_intercept_only"];
    for (l, want) in nums(&io["lambdas"]).into_iter().zip(nums(&io["llf"])) {
        let got = diagnostics::transform::power_profile_llf(&ones, &c.y, None, l).expect("llf");
        err.close("boxcox_llf intercept only", got, want, EXACT_TOL);
    }
    let p_io = diagnostics::transform::power_profile(&ones, &c.y, None, (-5.0, 5.0));
    let p_io = ok(&p_io, "intercept-only profile");
    err.close_floor(
        "boxcox intercept-only lambda (abs)",
        p_io.lambda_hat(),
        num(&io["lambda_mle"]),
        OPTIMISER_TOL,
        1.0,
    );

    // Yeo-Johnson, intercept only: scipy.stats.yeojohnson_llf and scipy.stats.yeojohnson's λ.
    let yj = &e["yeojohnson"];
    let data = nums(&yj["data"]);
    for (l, want) in nums(&yj["lambdas"]).into_iter().zip(nums(&yj["llf"])) {
        let got = diagnostics::transform::power_profile_llf(&ones, &data, None, l).expect("llf");
        err.close("yeojohnson_llf", got, want, EXACT_TOL);
    }
    let p_yj = diagnostics::transform::power_profile(&ones, &data, None, (-5.0, 5.0));
    let p_yj = ok(&p_yj, "yeo-johnson profile");
    assert_eq!(p_yj.family(), PowerFamily::YeoJohnson);
    err.close_floor("yeojohnson lambda (abs)", p_yj.lambda_hat(), num(&yj["lambda_mle"]), OPTIMISER_TOL, 1.0);

    // No NaN anywhere in the verdicts.
    for (name, v) in c.checks.verdicts() {
        assert!(!v.statistic().is_nan(), "{name}: NaN statistic");
        assert!(v.p_value().is_none_or(|p| (0.0..=1.0).contains(&p)), "{name}: p outside [0, 1]");
        assert!(!v.meaning().is_empty(), "{name}: empty meaning");
    }
    err.report(name);
}

fn with_intercept(x: &Matrix) -> Matrix {
    let mut cols = vec![vec![1.0; x.nrows()]];
    cols.extend((0..x.ncols()).map(|j| x.column(j).to_vec()));
    Matrix::from_columns(&cols)
}

fn build_thresholds(c: &Case, rule: SizeRule) -> f64 {
    let opts = CheckOptions::default().with_size_rule(rule);
    let checks = diagnostics::run(&c.fit, &opts);
    ok(checks.influence(), "influence").thresholds().dffits()
}

#[test]
fn fixture_longley() {
    // Longley (statsmodels datasets): ill-conditioned, the hardest case for the influence
    // measures; statsmodels' own error there is up to 6e-9 (fixture README).
    check("longley");
}

#[test]
fn fixture_stackloss() {
    // Stack loss (statsmodels datasets), 21 rows.
    check("stackloss");
}

#[test]
fn fixture_synthetic_influence() {
    // Seeded, n = 30, row 7 planted at high leverage and far below the plane.
    check("synthetic_influence");
    let c = build("synthetic_influence", &CheckOptions::default());
    let infl = ok(c.checks.influence(), "influence");
    let r7 = &infl.rows()[7];
    assert_eq!(r7.key(), "r7");
    assert!(r7.flagged(), "the planted row is flagged");
    assert!(r7.hat_flag(), "the planted row has high leverage");
    assert_eq!(r7.cooks_band(), Some(InfluenceBand::Major), "the planted row has major influence");
    // n = 30 is small or medium data by the default rule: both cut-offs are 1.
    assert_eq!(infl.thresholds().dffits(), 1.0);
    assert_eq!(infl.thresholds().dfbetas(), 1.0);
    assert!(infl.flagged_keys().contains(&"r7".to_owned()));
    assert_ne!(infl.verdict().label(), VerdictLevel::Clear);
}

#[test]
fn fixture_synthetic_hetero() {
    // Seeded, n = 60, error SD proportional to x1: constant variance must be rejected.
    check("synthetic_hetero");
    let c = build("synthetic_hetero", &CheckOptions::default());
    let bp = ok(c.checks.breusch_pagan_predictors(), "bp");
    assert_eq!(bp.verdict().label(), VerdictLevel::Problem);
    assert!(bp.verdict().meaning().contains("HC3"));
}

#[test]
fn fixture_shapiro_samples() {
    // scipy.stats.shapiro on 22 seeded samples, n = 3 … 5000 (fixture diagnostics/shapiro.json).
    let fx = load("shapiro");
    let mut err = Errors::default();
    for case in fx["cases"].as_array().expect("cases") {
        let data = nums(&case["data"]);
        let n = data.len();
        let sw = diagnostics::normality::shapiro_wilk(&data, 0.05);
        let sw = ok(&sw, "shapiro");
        assert_eq!(sw.n(), n);
        err.close("shapiro W", sw.w(), num(&case["W"]), EXACT_TOL);
        err.close("shapiro p", sw.p_value(), num(&case["pvalue"]), SHAPIRO_P_TOL);
    }
    err.report("shapiro");
}

#[test]
fn shapiro_published_worked_example() {
    // Shapiro & Wilk (1965), "An analysis of variance test for normality (complete samples)",
    // Biometrika 52, 591–611, section 4 worked example: weights in pounds of 11 men, giving
    // W = 0.79, significant at the 1% level (data and result recalled from memory).
    let weights = [148.0, 154.0, 158.0, 160.0, 161.0, 162.0, 166.0, 170.0, 182.0, 195.0, 236.0];
    let sw = diagnostics::normality::shapiro_wilk(&weights, 0.01);
    let sw = ok(&sw, "shapiro");
    assert!((sw.w() - 0.79).abs() < 0.005, "W = {}", sw.w());
    assert!(sw.p_value() < 0.01, "p = {}", sw.p_value());
    assert_eq!(sw.verdict().label(), VerdictLevel::Problem);
}

#[test]
fn shapiro_range_and_degenerate_input() {
    // Royston's algorithm covers 3 ≤ n ≤ 5000; outside it, and for constant data, the check is
    // unavailable with a plain message instead of a number.
    let two = diagnostics::normality::shapiro_wilk(&[1.0, 2.0], 0.05);
    assert!(two.reason().is_some_and(|r| r.contains("at least 3")), "{two:?}");
    let big: Vec<f64> = (0..5001).map(|i| f64::from(i).sin()).collect();
    let out = diagnostics::normality::shapiro_wilk(&big, 0.05);
    assert!(out.reason().is_some_and(|r| r.contains("5000")), "{out:?}");
    let flat = diagnostics::normality::shapiro_wilk(&[2.0; 10], 0.05);
    assert!(flat.reason().is_some_and(|r| r.contains("equal")), "{flat:?}");
    // n = 3 has an exact p-value: W = 1 for equally spaced values, so p = 1.
    let three = diagnostics::normality::shapiro_wilk(&[1.0, 2.0, 3.0], 0.05);
    let three = ok(&three, "n = 3");
    assert!((three.w() - 1.0).abs() < 1e-12 && (three.p_value() - 1.0).abs() < 1e-9);
}

#[test]
fn exact_fit_keeps_the_report_going() {
    // y is an exact linear function of x: every residual check is unavailable with a reason,
    // while collinearity and the rows guard are still computed.
    let n = 12;
    let x1: Vec<f64> = (0..n).map(|i| f64::from(i as u32)).collect();
    let x2: Vec<f64> = (0..n).map(|i| f64::from((i * i % 7) as u32)).collect();
    let y: Vec<f64> = x1.iter().zip(&x2).map(|(a, b)| 1.0 + 2.0 * a - b).collect();
    let d = Design::from_matrix(
        Matrix::from_columns(&[x1, x2]),
        y,
        None,
        vec!["a".into(), "b".into()],
        keys(n),
        true,
    )
    .expect("design");
    let fit = Fit::new(&d, &FitOptions::default()).expect("fit");
    let checks = diagnostics::run(&fit, &CheckOptions::default());
    for (what, reason) in [
        ("shapiro", checks.shapiro().reason()),
        ("bf", checks.brown_forsythe().reason()),
        ("bp", checks.breusch_pagan_predictors().reason()),
        ("reset", checks.reset().reason()),
        ("influence", checks.influence().reason()),
        ("robust", checks.robust().reason()),
    ] {
        assert!(reason.is_some_and(|r| r.contains("exactly")), "{what}: {reason:?}");
    }
    assert!(checks.vif().is_ok());
    assert!(checks.condition().is_ok());
    assert!(checks.rows_guard().is_ok());
}

#[test]
fn too_few_rows_for_some_tests() {
    // n = 4 with 2 coefficients: RESET needs n ≥ p + 3 = 5 and is unavailable; the rest runs.
    let x = vec![1.0, 2.0, 3.0, 5.0];
    let y = vec![1.1, 1.9, 3.2, 4.8];
    let d = Design::from_matrix(Matrix::from_columns(&[x]), y, None, vec!["x".into()], keys(4), true)
        .expect("design");
    let fit = Fit::new(&d, &FitOptions::default()).expect("fit");
    let checks = diagnostics::run(&fit, &CheckOptions::default());
    assert!(checks.reset().reason().is_some_and(|r| r.contains("rows")), "{:?}", checks.reset());
    assert!(checks.search().reason().is_some(), "10-fold CV needs 10 rows");
    assert!(checks.shapiro().is_ok());
    // The rows guard: 4 rows for 1 predictor is below 10 per predictor.
    let guard = ok(checks.rows_guard(), "guard");
    assert_eq!(guard.verdict().label(), VerdictLevel::Watch);
    assert_eq!(guard.rows_per_predictor(), 4.0);
}

#[test]
fn options_are_validated() {
    assert!(CheckOptions::default().with_alpha(0.0).is_err());
    assert!(CheckOptions::default().with_alpha(f64::NAN).is_err());
    assert!(CheckOptions::default().with_cv_folds(1).is_err());
    assert!(CheckOptions::default().with_lambda_range(0.0, 3.0).is_err());
    assert!(CheckOptions::default().with_top_candidates(21).is_err());
    let o = CheckOptions::default().with_alpha(0.01).expect("valid");
    assert_eq!(o.alpha(), 0.01);
}

#[test]
fn condition_indices_hand_checkable() {
    // Two unit-length columns with cosine c: XᵀX = [[1, c], [c, 1]] has eigenvalues 1 ± c with
    // eigenvectors (1, ±1)/√2, so the condition index is √((1 + c)/(1 − c)) and the small
    // component carries the share (1 + c)/2 of each coefficient's variance (Belsley, Kuh &
    // Welsch 1980, §3.2, worked by hand).
    let a = vec![1.0, 1.0, 1.0, 1.0];
    let b = vec![1.0, 1.0, 1.0, -1.0];
    let c = 0.5; // cos angle = (1 + 1 + 1 − 1)/(2·2)
    let x = Matrix::from_columns(&[a, b]);
    let cd = diagnostics::collinearity::condition_diagnostics(&x, &["a".into(), "b".into()]);
    let cd = ok(&cd, "condition");
    let want_index = ((1.0_f64 + c) / (1.0 - c)).sqrt();
    assert!((cd.indices()[0] - 1.0).abs() < 1e-14);
    assert!((cd.indices()[1] - want_index).abs() < 1e-13, "{:?}", cd.indices());
    for j in 0..2 {
        assert!((cd.proportions()[1][j] - (1.0 + c) / 2.0).abs() < 1e-13, "{:?}", cd.proportions());
        assert!((cd.proportions()[0][j] - (1.0 - c) / 2.0).abs() < 1e-13);
    }
}

#[test]
fn condition_indices_longley_from_memory() {
    // Longley's design with the constant, columns scaled to unit length: the largest condition
    // index is about 43,275 (value recalled from memory of published collinearity
    // diagnostics of this data set; Belsley, Kuh & Welsch 1980 discuss such scaled indices).
    let c = build("longley", &CheckOptions::default());
    let cd = ok(c.checks.condition(), "condition");
    let max = *cd.indices().last().expect("indices");
    assert!((max - 43_275.0).abs() / 43_275.0 < 1e-3, "largest condition index {max}");
    assert_eq!(cd.verdict().label(), VerdictLevel::Problem);
    // Each coefficient's variance proportions sum to 1.
    for j in 0..cd.names().len() {
        let s: f64 = cd.proportions().iter().map(|row| row[j]).sum();
        assert!((s - 1.0).abs() < 1e-12);
    }
}

#[test]
fn box_tidwell_recovers_a_planted_power() {
    // y = 2 + 3·√x1 + 0.5·x2 exactly: the Box-Tidwell iteration must settle on 0.5 for x1, since
    // the power model then fits without error (hand-checkable synthetic case), and the score test
    // sees the curvature.
    let n = 25;
    let x1: Vec<f64> = (0..n).map(|i| 1.0 + f64::from(i as u32).powi(2) / 4.0).collect();
    let x2: Vec<f64> = (0..n).map(|i| f64::from(((i * 7) % 11) as u32)).collect();
    let noise: Vec<f64> = (0..n).map(|i| 1e-3 * (f64::from(i as u32) * 1.7).sin()).collect();
    let y: Vec<f64> = (0..n).map(|i| 2.0 + 3.0 * x1[i].sqrt() + 0.5 * x2[i] + noise[i]).collect();
    let x = with_intercept(&Matrix::from_columns(&[x1, x2]));
    let bt = diagnostics::transform::box_tidwell(&x, &y, None, 1, "x1", 0.05);
    let bt = ok(&bt, "box-tidwell");
    assert!(bt.converged());
    assert!((bt.estimate() - 0.5).abs() < 1e-3, "estimate {}", bt.estimate());
    assert!(bt.score_p() < 1e-6);
    assert_eq!(bt.verdict().label(), VerdictLevel::Watch);
    // A linear effect gives a power near 1 and no evidence of curvature.
    let n = 40;
    let z1: Vec<f64> = (0..n).map(|i| 1.0 + f64::from(i as u32)).collect();
    let e: Vec<f64> = (0..n).map(|i| (f64::from(i as u32) * 12.9898).sin() * 0.5).collect();
    let y2: Vec<f64> = (0..n).map(|i| 1.0 + 2.0 * z1[i] + e[i]).collect();
    let x2 = with_intercept(&Matrix::from_columns(&[z1]));
    let bt2 = diagnostics::transform::box_tidwell(&x2, &y2, None, 1, "z1", 0.05);
    let bt2 = ok(&bt2, "box-tidwell linear");
    assert!((bt2.estimate() - 1.0).abs() < 0.1, "estimate {}", bt2.estimate());
    assert_eq!(bt2.verdict().label(), VerdictLevel::Clear);
}

#[test]
fn smearing_hand_checkable() {
    // Duan (1983): the mean on the original scale is the average of g⁻¹(ẑ + eᵢ).
    // Log scale, residuals ±ln 2: 10·(1/2 + 2)/2 = 12.5.
    let ln2 = std::f64::consts::LN_2;
    let v = diagnostics::transform::smearing_estimate(10f64.ln(), &[-ln2, ln2], 0.0).expect("defined");
    assert!((v - 12.5).abs() < 1e-12, "{v}");
    // Square-root scale, residuals ±1 around 3: (2² + 4²)/2 = 10 = 3² + mean(e²).
    let v = diagnostics::transform::smearing_estimate(3.0, &[-1.0, 1.0], 0.5).expect("defined");
    assert!((v - 10.0).abs() < 1e-12, "{v}");
    // Reciprocal scale: undefined when ẑ + e ≤ 0.
    assert!(diagnostics::transform::smearing_estimate(0.5, &[-1.0, 1.0], -1.0).is_none());
}

#[test]
fn refit_without_flagged_rows_leaves_the_original_alone() {
    let c = build("synthetic_influence", &CheckOptions::default());
    let before = c.fit.coefficients().to_vec();
    let refit = ok(c.checks.refit(), "refit");
    let infl = ok(c.checks.influence(), "influence");
    assert_eq!(refit.removed(), infl.flagged_keys().as_slice());
    assert_eq!(refit.original().coefficients(), before.as_slice());
    assert_eq!(c.fit.coefficients(), before.as_slice());
    // The refit equals a direct fit of the design without those rows.
    let d = c.fit.design().without_rows(refit.removed()).expect("design");
    let direct = Fit::new(&d, &FitOptions::default()).expect("fit");
    assert_eq!(refit.refit().nobs(), 30 - refit.removed().len());
    for (a, b) in refit.refit().coefficients().iter().zip(direct.coefficients()) {
        assert!((a - b).abs() <= 1e-12 * b.abs().max(1.0));
    }
    assert!((refit.refit().r_squared() - direct.r_squared()).abs() < 1e-14);
    assert!(!refit.refit().verdicts().is_empty());
}

/// A seeded uniform stream for synthetic data (not part of the engine).
fn lcg(seed: &mut u64) -> f64 {
    *seed = seed.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1_442_695_040_888_963_407);
    ((*seed >> 11) as f64) / ((1u64 << 53) as f64)
}

#[test]
fn search_finds_a_planted_log_and_never_changes_the_model() {
    // y = 5 + 4·ln(x1) + 0.3·x2 + small noise, x1 spread over two decades: the best candidate
    // must take the log of x1; the model as fitted is untouched and is in the table.
    let fit = planted_log_fit();
    let before = fit.coefficients().to_vec();
    let checks = diagnostics::run(&fit, &CheckOptions::default());
    let search = ok(checks.search(), "search");
    let best = search.best().expect("candidates");
    assert_eq!(best.predictor_powers()[0], ("x1".to_owned(), 0.0), "best: {}", best.label());
    assert!(best.summary().is_some());
    assert!(search.candidates().iter().any(|c| c.is_current()));
    let ranks: Vec<usize> = search.candidates().iter().map(|c| c.rank()).collect();
    assert_eq!(ranks, (1..=ranks.len()).collect::<Vec<_>>());
    assert!(
        search
            .candidates()
            .windows(2)
            .all(|w| w[0].cv_rmse().unwrap_or(f64::INFINITY) <= w[1].cv_rmse().unwrap_or(f64::INFINITY))
    );
    assert_eq!(fit.coefficients(), before.as_slice());
    // Box-Tidwell on x1 sees the curvature and points near 0 (the log).
    let bt = checks.box_tidwell().iter().find(|b| b.name() == "x1").expect("x1");
    let bt = ok(bt.outcome(), "box-tidwell");
    assert!(bt.estimate().abs() < 0.2, "estimate {}", bt.estimate());
    // The same seed gives the same table.
    let again = diagnostics::run(&fit, &CheckOptions::default());
    let again = ok(again.search(), "search");
    assert_eq!(again.candidates(), search.candidates());
}

#[test]
fn search_suggests_a_response_power_and_smears_back() {
    // log y = 1 + 0.8·x + noise: the Box-Cox profile suggests the log, and the search ranks a
    // log-response candidate (back-transformed with smearing) above the untransformed model.
    let mut s = 11u64;
    let n = 120;
    let x: Vec<f64> = (0..n).map(|_| 4.0 * lcg(&mut s)).collect();
    let y: Vec<f64> = x.iter().map(|v| (1.0 + 0.8 * v + 0.3 * (lcg(&mut s) - 0.5)).exp()).collect();
    let d = Design::from_matrix(Matrix::from_columns(&[x]), y, None, vec!["x".into()], keys(n), true)
        .expect("design");
    let fit = Fit::new(&d, &FitOptions::default()).expect("fit");
    let checks = diagnostics::run(&fit, &CheckOptions::default());
    let prof = ok(checks.response_power(), "profile");
    assert_eq!(prof.suggested(), Some(0.0), "lambda {}", prof.lambda_hat());
    assert_eq!(prof.verdict().label(), VerdictLevel::Watch);
    let search = ok(checks.search(), "search");
    let best = search.best().expect("best");
    assert_eq!(best.response_power(), 0.0, "best: {}", best.label());
    let current = search.candidates().iter().find(|c| c.is_current()).expect("current");
    assert!(best.cv_rmse().expect("rmse") < current.cv_rmse().expect("rmse"));
}

#[test]
fn weighted_fit_runs_every_check() {
    // WLS fixture data (fit/synthetic_wls.json): every residual check works on √w-scaled
    // residuals; HC0 on the transformed model equals the sandwich built by hand here.
    let path = fixture_dir().join("../fit/synthetic_wls.json");
    let fx: Value = serde_json::from_str(&std::fs::read_to_string(path).expect("read")).expect("json");
    let rows: Vec<Vec<f64>> = fx["x"].as_array().expect("x").iter().map(nums).collect();
    let names: Vec<String> =
        fx["names"].as_array().expect("names").iter().map(|v| v.as_str().expect("s").to_owned()).collect();
    let y = nums(&fx["y"]);
    let w = nums(&fx["weights"]);
    let n = y.len();
    let d = Design::from_matrix(Matrix::from_rows(&rows), y, Some(w.clone()), names, keys(n), true)
        .expect("design");
    let fit = Fit::new(&d, &FitOptions::default()).expect("fit");
    let checks = diagnostics::run(&fit, &CheckOptions::default());
    assert!(checks.weighted());
    for (name, v) in checks.verdicts() {
        assert!(!v.statistic().is_nan(), "{name}");
    }
    let res = ok(checks.residuals(), "residuals");
    for ((s, r), wi) in res.scaled().iter().zip(res.raw()).zip(&w) {
        assert!((s - r * wi.sqrt()).abs() <= 1e-12 * s.abs().max(1e-12));
    }
    // Hand sandwich: HC0 = C·Σ wᵢ²eᵢ²·xᵢxᵢᵀ·C with C = (XᵀWX)⁻¹, the fit's unscaled covariance.
    let c = fit.unscaled_covariance();
    let x = fit.design().x();
    let p = x.ncols();
    let mut meat = Matrix::zeros(p, p);
    for (i, (wi, ei)) in w.iter().zip(fit.residuals()).enumerate() {
        // (√w·x)(√w·x)ᵀ·(√w·e)² = w²·e²·x·xᵀ.
        let s = wi * wi * ei * ei;
        let xi = x.row(i);
        for (a, xa) in xi.iter().enumerate() {
            for (b, xb) in xi.iter().enumerate() {
                meat.set(a, b, meat.get(a, b) + s * xa * xb);
            }
        }
    }
    let sandwich = c.matmul(&meat).matmul(c);
    let rob = ok(checks.robust(), "robust");
    for j in 0..p {
        let want = sandwich.get(j, j).sqrt();
        assert!((rob.hc0()[j] - want).abs() <= 1e-9 * want, "HC0[{j}] {} vs {want}", rob.hc0()[j]);
    }
}

/// Reads the demo district table with a minimal CSV parse (the file is plain, unquoted).
fn demo_table() -> Option<Table> {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../demo/larkmoor_districts.csv");
    let text = std::fs::read_to_string(path).ok()?;
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next()?.split(',').collect();
    let rows: Vec<Vec<&str>> =
        lines.filter(|l| !l.trim().is_empty()).map(|l| l.split(',').collect()).collect();
    let col = |name: &str| header.iter().position(|h| *h == name).expect("column");
    let numeric = |name: &str| -> Vec<Option<f64>> {
        let j = col(name);
        rows.iter().map(|r| r[j].trim().parse::<f64>().ok()).collect()
    };
    let keys: Vec<String> = rows.iter().map(|r| r[col("district_code")].to_owned()).collect();
    let assaults = numeric("assaults");
    let residents = numeric("residents");
    let rate: Vec<Option<f64>> =
        assaults.iter().zip(&residents).map(|(a, r)| Some(a.as_ref()? / r.as_ref()? * 10_000.0)).collect();
    let mut columns = vec![Column::numeric("assault_rate_per_10k", rate)];
    for name in DEMO_INDICATORS {
        columns.push(Column::numeric(name, numeric(name)));
    }
    Table::new(keys, columns).ok()
}

const DEMO_INDICATORS: [&str; 7] = [
    "median_income",
    "unemployment_pct",
    "youth_share_pct",
    "vacancy_pct",
    "alcohol_outlets_per_1k",
    "afterschool_seats_per_100",
    "streetlight_outages_per_km",
];

#[test]
fn demo_arena_is_flagged_and_vacancy_wants_a_log() {
    // The planted structure of the invented Larkmoor demo (demo/README.md): LK-47, the arena
    // quarter, dominates Cook's distance and DFFITS; the true rate rises with ln(vacancy).
    let Some(table) = demo_table() else {
        panic!("demo/larkmoor_districts.csv is missing");
    };
    let mut spec = ModelSpec::new("assault_rate_per_10k", &DEMO_INDICATORS);
    let design = Design::build(&table, &spec).expect("design");
    let fit = Fit::new(&design, &FitOptions::default()).expect("fit");
    let checks = diagnostics::run(&fit, &CheckOptions::default());
    let infl = ok(checks.influence(), "influence");
    let arena = infl.rows().iter().find(|r| r.key() == "LK-47").expect("arena row");
    assert_eq!(arena.cooks_band(), Some(InfluenceBand::Major), "arena Cook's distance");
    assert!(arena.dffits_flag(), "arena DFFITS");
    assert!(arena.flagged());
    let top_cook =
        infl.rows().iter().max_by(|a, b| a.cooks_d().unwrap_or(0.0).total_cmp(&b.cooks_d().unwrap_or(0.0)));
    assert_eq!(top_cook.map(|r| r.key()), Some("LK-47"));
    let top_dffits = infl
        .rows()
        .iter()
        .max_by(|a, b| a.dffits().unwrap_or(0.0).abs().total_cmp(&b.dffits().unwrap_or(0.0).abs()));
    assert_eq!(top_dffits.map(|r| r.key()), Some("LK-47"));
    // The published planted numbers: Cook's D 15.7 and leverage 0.736 with linear vacancy.
    assert!((arena.cooks_d().expect("cook") - 15.656).abs() < 5e-3);
    assert!((arena.hat() - 0.736).abs() < 5e-4);

    // With the arena excluded (as an analyst would, with a reason), Box-Tidwell and the
    // search point to a log-type transform of vacancy.
    spec.exclusions.push(Exclusion { key: "LK-47".into(), reason: "event crowds, not residents".into() });
    let design = Design::build(&table, &spec).expect("design");
    let fit = Fit::new(&design, &FitOptions::default()).expect("fit");
    let checks = diagnostics::run(&fit, &CheckOptions::default());
    let search = ok(checks.search(), "search");
    let best_vacancy = search
        .candidates()
        .iter()
        .find(|c| {
            c.response_power() == 1.0
                && c.predictor_powers().iter().any(|(n, p)| n == "vacancy_pct" && *p != 1.0)
        })
        .expect("a vacancy candidate");
    let power = best_vacancy.predictor_powers().iter().find(|(n, _)| n == "vacancy_pct").map(|(_, p)| *p);
    assert!(
        matches!(power, Some(p) if p == 0.0 || p == -0.5),
        "best vacancy power {power:?}: {}",
        best_vacancy.label()
    );
    let current = search.candidates().iter().find(|c| c.is_current()).expect("current");
    assert!(best_vacancy.rank() < current.rank(), "{} vs current", best_vacancy.label());
}

/// y = 5 + 4·ln(x1) + 0.3·x2 + small noise over 80 rows, x1 spread over two decades, fitted.
fn planted_log_fit() -> Fit {
    let mut s = 7u64;
    let n = 80;
    let x1: Vec<f64> = (0..n).map(|_| 10f64.powf(2.0 * lcg(&mut s))).collect();
    let x2: Vec<f64> = (0..n).map(|_| 1.0 + 9.0 * lcg(&mut s)).collect();
    let y: Vec<f64> =
        (0..n).map(|i| 5.0 + 4.0 * x1[i].ln() + 0.3 * x2[i] + 0.2 * (lcg(&mut s) - 0.5)).collect();
    let d = Design::from_matrix(
        Matrix::from_columns(&[x1, x2]),
        y,
        None,
        vec!["x1".into(), "x2".into()],
        keys(n),
        true,
    )
    .expect("design");
    Fit::new(&d, &FitOptions::default()).expect("fit")
}

#[test]
fn search_on_its_own_matches_the_checks_and_reports_every_step() {
    // The stand-alone search with other options equals the search inside `run` with the same
    // options, and its progress callback sees 1, 2, …, total with a constant total.
    let fit = planted_log_fit();
    for (folds, seed, top) in [(10, 20_250_601, 3), (5, 99, 0), (4, 7, 20)] {
        let opts = CheckOptions::default()
            .with_cv_folds(folds)
            .expect("folds")
            .with_cv_seed(seed)
            .with_lambda_range(-2.0, 2.5)
            .expect("range")
            .with_top_candidates(top)
            .expect("top");
        let seen = std::sync::Mutex::new(Vec::new());
        let progress = |done: usize, total: usize| seen.lock().expect("lock").push((done, total));
        let control = diagnostics::SearchControl { progress: Some(&progress), cancel: None };
        let alone = diagnostics::transform_search(&fit, &opts, control).expect("not cancelled");
        let alone = ok(&alone, "search alone");
        let inside = diagnostics::run(&fit, &opts);
        let inside = ok(inside.search(), "search in run");
        assert_eq!(alone, inside);
        assert_eq!((alone.folds(), alone.seed()), (folds, seed));
        let summaries = alone.candidates().iter().filter(|c| c.summary().is_some()).count();
        assert_eq!(summaries, top.min(alone.candidates().len()));
        let seen = seen.into_inner().expect("lock");
        let total = seen.last().expect("some steps").1;
        // Two searched columns, the response as is only: 1 + 2·5 + 1 tried, plus the summaries.
        assert_eq!(total, 12 + top.min(12));
        assert_eq!(seen, (1..=total).map(|d| (d, total)).collect::<Vec<_>>());
    }
}

#[test]
fn search_on_its_own_stops_when_cancelled() {
    let fit = planted_log_fit();
    let opts = CheckOptions::default();
    // Raised before the start: no step runs.
    let flag = std::sync::atomic::AtomicBool::new(true);
    let calls = std::sync::atomic::AtomicUsize::new(0);
    let count = |_: usize, _: usize| {
        calls.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    };
    let control = diagnostics::SearchControl { progress: Some(&count), cancel: Some(&flag) };
    let r = diagnostics::transform_search(&fit, &opts, control);
    assert!(matches!(r, Err(wardcast_engine::EngineError::Cancelled)), "{r:?}");
    assert_eq!(calls.load(std::sync::atomic::Ordering::Relaxed), 0);
    // Raised from the progress callback after the third step: the search stops right there.
    let flag = std::sync::atomic::AtomicBool::new(false);
    let last = std::sync::atomic::AtomicUsize::new(0);
    let raise = |done: usize, _: usize| {
        last.store(done, std::sync::atomic::Ordering::Relaxed);
        if done == 3 {
            flag.store(true, std::sync::atomic::Ordering::Relaxed);
        }
    };
    let control = diagnostics::SearchControl { progress: Some(&raise), cancel: Some(&flag) };
    let r = diagnostics::transform_search(&fit, &opts, control);
    assert!(matches!(r, Err(wardcast_engine::EngineError::Cancelled)), "{r:?}");
    assert_eq!(last.load(std::sync::atomic::Ordering::Relaxed), 3);
    // An unraised flag changes nothing.
    let flag = std::sync::atomic::AtomicBool::new(false);
    let control = diagnostics::SearchControl { progress: None, cancel: Some(&flag) };
    let r = diagnostics::transform_search(&fit, &opts, control).expect("finishes");
    assert_eq!(ok(&r, "search"), ok(diagnostics::run(&fit, &opts).search(), "search"));
}

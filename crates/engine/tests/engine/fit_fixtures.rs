//! OLS and WLS results compared with statsmodels fixtures (tests/fixtures/fit/*.json).
//!
//! Source: `tests/generate/make_fixtures.py`, statsmodels 0.14.6 `OLS`/`WLS(...).fit()`,
//! `anova_lm(typ=1)`, `compare_f_test`, `get_prediction(...).summary_frame(alpha=0.05)`; each
//! file's `"source"` string names the exact calls. Every quantity is compared at relative 1e-8.
//! Entries of a vector that are near zero (residuals) are compared with an absolute floor of
//! 1e-8 times the vector's largest magnitude, because a relative error of a near-zero residual
//! measures cancellation in the reference, not the fit (the Longley fixture's own residuals
//! differ from exact arithmetic by 6.5e-10 elementwise, tests/fixtures/README.md).

use serde_json::Value;
use wardcast_engine::{Design, Fit, FitOptions, Matrix, SsBasis};

use crate::common::{assert_all_close, assert_close, fixture, num, nums, rows};

/// Relative tolerance of every comparison in this module.
const REL: f64 = 1e-8;

/// Builds the design of a fixture case from its inputs.
fn design_of(case: &Value) -> Design {
    let names: Vec<String> = case["names"]
        .as_array()
        .expect("names")
        .iter()
        .map(|v| v.as_str().expect("name").to_owned())
        .collect();
    let x = rows(&case["x"]);
    let y = nums(&case["y"]);
    let cols: Vec<Vec<f64>> = (0..names.len()).map(|j| x.iter().map(|r| r[j]).collect()).collect();
    let weights = if case["weights"].is_null() { None } else { Some(nums(&case["weights"])) };
    let keys = (1..=y.len()).map(|i| format!("row{i}")).collect();
    let intercept = case["intercept"].as_bool().expect("intercept flag");
    Design::from_matrix(Matrix::from_columns(&cols), y, weights, names, keys, intercept)
        .expect("valid design")
}

/// Compares every fitted quantity of one fixture case.
fn check(name: &str) {
    let case = fixture(&format!("fit/{name}.json"));
    let e = &case["expected"];
    let d = design_of(&case);
    let fit = Fit::new(&d, &FitOptions::default()).expect("fit");
    let w = |q: &str| format!("{name}: {q}");

    assert_all_close(&w("params"), fit.coefficients(), &nums(&e["params"]), REL, 0.0);
    assert_all_close(&w("bse"), fit.std_errors(), &nums(&e["bse"]), REL, 0.0);
    let t: Vec<f64> = fit.t_values().iter().map(|v| v.expect("t defined")).collect();
    assert_all_close(&w("tvalues"), &t, &nums(&e["tvalues"]), REL, 0.0);
    let p: Vec<f64> = fit.p_values().iter().map(|v| v.expect("p defined")).collect();
    assert_all_close(&w("pvalues"), &p, &nums(&e["pvalues"]), REL, 0.0);
    for (key, level) in [("conf_int_95", 0.95), ("conf_int_90", 0.90)] {
        let ci = fit.conf_int(level).expect("level");
        let exp = rows(&e[key]);
        for (k, ((lo, hi), ex)) in ci.iter().zip(&exp).enumerate() {
            assert_close(&w(&format!("{key}[{k}].lo")), *lo, ex[0], REL, 0.0);
            assert_close(&w(&format!("{key}[{k}].hi")), *hi, ex[1], REL, 0.0);
        }
    }
    let cov = rows(&e["cov_params"]);
    let scale = cov.iter().flatten().fold(0.0_f64, |m, v| m.max(v.abs()));
    for (i, r) in cov.iter().enumerate() {
        for (j, v) in r.iter().enumerate() {
            // Off-diagonal covariances can be near zero; they are compared on the matrix's scale.
            let floor = if i == j { 0.0 } else { 1e-8 * scale };
            assert_close(&w(&format!("cov[{i},{j}]")), fit.covariance().get(i, j), *v, REL, floor);
        }
    }
    assert_close(&w("ssr (SSE)"), fit.sse(), num(&e["ssr"]), REL, 0.0);
    assert_close(&w("ess (SSR)"), fit.ssr(), num(&e["ess"]), REL, 0.0);
    assert_close(&w("tss (SSTO)"), fit.ssto(), num(&e["tss"]), REL, 0.0);
    let basis =
        if case["intercept"].as_bool() == Some(true) { SsBasis::AboutMean } else { SsBasis::AboutZero };
    assert_eq!(fit.ss_basis(), basis, "{name}: SS basis");
    assert_eq!(fit.df_model() as f64, num(&e["df_model"]), "{name}: df_model");
    assert_eq!(fit.df_resid() as f64, num(&e["df_resid"]), "{name}: df_resid");
    assert_close(&w("mse_resid"), fit.mse(), num(&e["mse_resid"]), REL, 0.0);
    assert_close(&w("scale_sqrt"), fit.sigma(), num(&e["scale_sqrt"]), REL, 0.0);
    assert_close(&w("rsquared"), fit.r_squared(), num(&e["rsquared"]), REL, 0.0);
    assert_close(&w("rsquared_adj"), fit.adj_r_squared(), num(&e["rsquared_adj"]), REL, 0.0);
    assert_close(&w("fvalue"), fit.f_statistic().expect("F"), num(&e["fvalue"]), REL, 0.0);
    assert_close(&w("f_pvalue"), fit.f_p_value().expect("F p"), num(&e["f_pvalue"]), REL, 0.0);
    assert_close(&w("llf"), fit.log_likelihood(), num(&e["llf"]), REL, 0.0);
    assert_close(&w("aic"), fit.aic(), num(&e["aic"]), REL, 0.0);
    assert_close(&w("bic"), fit.bic(), num(&e["bic"]), REL, 0.0);
    assert_all_close(&w("fittedvalues"), fit.fitted(), &nums(&e["fittedvalues"]), REL, 0.0);
    assert_all_close(&w("resid"), fit.residuals(), &nums(&e["resid"]), REL, 1e-8);

    // Sequential ANOVA: anova_lm typ 1 for OLS; nested-fit differences under WLS.
    let anova = if e["anova_lm_typ1"].is_null() { &e["anova_seq_nested"] } else { &e["anova_lm_typ1"] };
    let anova = anova.as_array().expect("anova rows");
    assert_eq!(fit.sequential_anova().len(), anova.len(), "{name}: anova rows");
    for (row, ex) in fit.sequential_anova().iter().zip(anova) {
        assert_eq!(row.term, ex["term"].as_str().expect("term"), "{name}: anova term order");
        assert_eq!(row.df as f64, num(&ex["df"]));
        assert_close(&w(&format!("anova {} sum_sq", row.term)), row.ss, num(&ex["sum_sq"]), REL, 0.0);
        assert_close(&w(&format!("anova {} mean_sq", row.term)), row.ms, num(&ex["mean_sq"]), REL, 0.0);
        assert_close(&w(&format!("anova {} F", row.term)), row.f.expect("F"), num(&ex["F"]), REL, 0.0);
        assert_close(&w(&format!("anova {} p", row.term)), row.p.expect("p"), num(&ex["PR(>F)"]), REL, 0.0);
    }

    // Partial F tests (compare_f_test of the full model against each one-term-dropped model).
    let partial = e["partial_f"].as_array().expect("partial_f");
    assert_eq!(fit.partial_f_tests().len(), partial.len());
    for (pf, ex) in fit.partial_f_tests().iter().zip(partial) {
        assert_eq!(pf.term, ex["term"].as_str().expect("term"));
        assert_close(&w(&format!("partial {} F", pf.term)), pf.f.expect("F"), num(&ex["F"]), REL, 0.0);
        assert_close(&w(&format!("partial {} p", pf.term)), pf.p.expect("p"), num(&ex["p"]), REL, 0.0);
        assert_close(
            &w(&format!("partial {} extra_ss", pf.term)),
            pf.extra_ss,
            num(&ex["extra_ss"]),
            REL,
            0.0,
        );
    }

    // Predictions with confidence and prediction intervals at 95%.
    let pr = &e["predict"];
    let xnew = rows(&pr["x_new"]);
    let full: Vec<Vec<f64>> = xnew
        .iter()
        .map(|r| {
            if d.has_intercept() {
                std::iter::once(1.0).chain(r.iter().copied()).collect()
            } else {
                r.clone()
            }
        })
        .collect();
    let wnew = if pr["weights_new"].is_null() { None } else { Some(nums(&pr["weights_new"])) };
    let level = 1.0 - num(&pr["alpha"]);
    let preds = fit.predict(&Matrix::from_rows(&full), wnew.as_deref(), level).expect("predict");
    let get = |k: &str| nums(&pr[k]);
    let col = |f: &dyn Fn(&wardcast_engine::Prediction) -> f64| preds.iter().map(f).collect::<Vec<f64>>();
    assert_all_close(&w("predict mean"), &col(&|p| p.fit), &get("mean"), REL, 0.0);
    assert_all_close(&w("predict mean_se"), &col(&|p| p.se_mean), &get("mean_se"), REL, 0.0);
    assert_all_close(&w("predict mean_ci_lower"), &col(&|p| p.mean_ci.0), &get("mean_ci_lower"), REL, 0.0);
    assert_all_close(&w("predict mean_ci_upper"), &col(&|p| p.mean_ci.1), &get("mean_ci_upper"), REL, 0.0);
    assert_all_close(&w("predict obs_ci_lower"), &col(&|p| p.pred_int.0), &get("obs_ci_lower"), REL, 0.0);
    assert_all_close(&w("predict obs_ci_upper"), &col(&|p| p.pred_int.1), &get("obs_ci_upper"), REL, 0.0);
}

#[test]
fn longley_matches_statsmodels() {
    check("longley");
}

#[test]
fn stackloss_matches_statsmodels() {
    check("stackloss");
}

#[test]
fn synthetic_ols_matches_statsmodels() {
    check("synthetic_ols");
}

#[test]
fn synthetic_wls_matches_statsmodels() {
    check("synthetic_wls");
}

#[test]
fn synthetic_noint_matches_statsmodels() {
    check("synthetic_noint");
}

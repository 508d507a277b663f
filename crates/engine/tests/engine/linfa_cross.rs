//! An independent cross-check of the fitted coefficients with linfa-linear's ordinary least
//! squares (`linfa_linear::LinearRegression`), on the fixture data.
//!
//! linfa solves the least-squares problem by its own factorisation without column scaling or
//! refinement, so agreement is asserted at relative 1e-6 only; the statsmodels and NIST
//! comparisons hold the engine to much tighter limits. Under weights the
//! check fits linfa without an intercept on the rows multiplied by √w, with √w as a column,
//! which is the WLS problem written as OLS.

use linfa::Dataset;
use linfa::traits::Fit as _;
use linfa_linear::LinearRegression;
use ndarray::{Array1, Array2};
use wardcast_engine::{Design, Fit, FitOptions, Matrix};

use crate::common::{assert_all_close, fixture, nums, rows};

fn check(name: &str, rel: f64) {
    let case = fixture(&format!("fit/{name}.json"));
    let x = rows(&case["x"]);
    let y = nums(&case["y"]);
    let n = y.len();
    let k = x[0].len();
    let intercept = case["intercept"].as_bool().expect("intercept");
    let weights = if case["weights"].is_null() { None } else { Some(nums(&case["weights"])) };

    let cols: Vec<Vec<f64>> = (0..k).map(|j| x.iter().map(|r| r[j]).collect()).collect();
    let names = (0..k).map(|j| format!("x{j}")).collect();
    let keys = (0..n).map(|i| i.to_string()).collect();
    let d =
        Design::from_matrix(Matrix::from_columns(&cols), y.clone(), weights.clone(), names, keys, intercept)
            .expect("design");
    let ours = Fit::new(&d, &FitOptions::default()).expect("fit");

    let theirs: Vec<f64> = match &weights {
        None => {
            let records = Array2::from_shape_fn((n, k), |(i, j)| x[i][j]);
            let model = LinearRegression::new()
                .with_intercept(intercept)
                .fit(&Dataset::new(records, Array1::from(y.clone())))
                .expect("linfa fit");
            let mut b: Vec<f64> = Vec::new();
            if intercept {
                b.push(model.intercept());
            }
            b.extend(model.params().iter());
            b
        }
        Some(w) => {
            let s: Vec<f64> = w.iter().map(|v| v.sqrt()).collect();
            let records =
                Array2::from_shape_fn((n, k + 1), |(i, j)| if j == 0 { s[i] } else { s[i] * x[i][j - 1] });
            let target = Array1::from_shape_fn(n, |i| s[i] * y[i]);
            let model = LinearRegression::new()
                .with_intercept(false)
                .fit(&Dataset::new(records, target))
                .expect("linfa fit");
            model.params().to_vec()
        }
    };
    assert_all_close(&format!("{name}: coefficients vs linfa"), ours.coefficients(), &theirs, rel, 0.0);
}

#[test]
fn coefficients_agree_with_linfa() {
    check("stackloss", 1e-6);
    check("synthetic_ols", 1e-6);
    check("synthetic_noint", 1e-6);
    check("synthetic_wls", 1e-6);
    check("longley", 1e-6);
}

//! Every bad input gets a typed error with a plain message; each message is asserted exactly.
//!
//! The inputs are small invented tables (district keys `LK-01` …); the expected messages are
//! this crate's own wording.

use wardcast_engine::{
    Column, Design, EngineError, Exclusion, Fit, FitOptions, Matrix, ModelSpec, PivotedQr, Predictor,
    PredictorValue, QrOptions, Table, Transform,
};

fn keys(n: usize) -> Vec<String> {
    (1..=n).map(|i| format!("LK-{i:02}")).collect()
}

/// A five-row table with two numeric predictors, a text column, weights and shares.
fn table() -> Table {
    let owners = [0.2, 0.5, 0.7, 0.1, 0.9, 0.4];
    Table::new(
        keys(6),
        vec![
            Column::from_f64("rate", &[12.0, 15.5, 9.0, 20.0, 7.5, 13.0]),
            Column::from_f64("unemployment_pct", &[5.0, 7.0, 4.0, 9.0, 3.0, 6.5]),
            Column::from_f64("vacancy_pct", &[2.0, 0.0, 1.5, 4.0, 1.0, 2.5]),
            Column::from_f64("flat", &[3.0; 6]),
            Column::from_f64("residents", &[1000.0, 0.0, 1200.0, 800.0, -5.0, 900.0]),
            Column::from_f64("share_owners", &owners),
            Column::from_f64("share_renters", &owners.map(|v| 1.0 - v)),
            Column::from_strs(
                "district_type",
                &["mixed", "centre", "mixed", "residential", "centre", "mixed"],
            ),
            Column::from_strs("borough", &["north"; 6]),
        ],
    )
    .expect("valid table")
}

/// The message of the error `r` must be exactly `msg`.
fn check<T: std::fmt::Debug>(r: Result<T, EngineError>, msg: &str) {
    match r {
        Ok(v) => panic!("expected the error \"{msg}\", got a result {v:?}"),
        Err(e) => assert_eq!(e.to_string(), msg),
    }
}

fn build(spec: &ModelSpec) -> Result<Design, EngineError> {
    Design::build(&table(), spec)
}

fn fit(spec: &ModelSpec) -> Result<Fit, EngineError> {
    build(spec).and_then(|d| Fit::new(&d, &FitOptions::default()))
}

#[test]
fn empty_input() {
    let t =
        Table::new(vec![], vec![Column::from_f64("rate", &[]), Column::from_f64("x", &[])]).expect("table");
    check(
        Design::build(&t, &ModelSpec::new("rate", &["x"])),
        "there are no rows to fit: the table is empty or every row was dropped",
    );
    // Every row excluded is the same situation.
    let mut spec = ModelSpec::new("rate", &["unemployment_pct"]);
    spec.exclusions = keys(6).into_iter().map(|key| Exclusion { key, reason: "audit".into() }).collect();
    check(build(&spec), "there are no rows to fit: the table is empty or every row was dropped");
}

#[test]
fn no_residual_degrees_of_freedom() {
    let x = Matrix::from_columns(&[vec![1.0, 2.0, 4.0], vec![3.0, 1.0, 0.0]]);
    let d = Design::from_matrix(x, vec![1.0, 2.0, 3.0], None, vec!["a".into(), "b".into()], keys(3), true)
        .expect("design");
    check(
        Fit::new(&d, &FitOptions::default()),
        "3 rows are not enough to estimate 3 parameters: at least 4 rows are needed",
    );
}

#[test]
fn constant_predictor_with_intercept() {
    check(
        fit(&ModelSpec::new("rate", &["unemployment_pct", "flat"])),
        "flat has the same value in every row used, so its effect cannot be separated from the intercept",
    );
    // Without an intercept a constant column is allowed (it plays the intercept's part).
    let mut spec = ModelSpec::new("rate", &["unemployment_pct", "flat"]);
    spec.intercept = false;
    assert!(fit(&spec).is_ok());
}

#[test]
fn constant_response() {
    let t = Table::new(
        keys(4),
        vec![Column::from_f64("rate", &[2.0; 4]), Column::from_f64("x", &[1.0, 2.0, 3.0, 5.0])],
    )
    .expect("table");
    let d = Design::build(&t, &ModelSpec::new("rate", &["x"])).expect("design");
    check(
        Fit::new(&d, &FitOptions::default()),
        "the response rate has the same value in every row used, so there is nothing to explain",
    );
}

#[test]
fn non_finite_values() {
    let t = Table::new(
        keys(4),
        vec![
            Column::from_f64("rate", &[1.0, 2.0, 3.0, 4.0]),
            Column::from_f64("vacancy_pct", &[1.0, 2.0, f64::NAN, 4.0]),
            Column::from_f64("income", &[1.0, f64::INFINITY, 2.0, 4.0]),
        ],
    )
    .expect("table");
    check(
        Design::build(&t, &ModelSpec::new("rate", &["vacancy_pct"])),
        "vacancy_pct is not a finite number in row LK-03",
    );
    check(
        Design::build(&t, &ModelSpec::new("rate", &["income"])),
        "income is not a finite number in row LK-02",
    );
    let x = Matrix::from_columns(&[vec![1.0, 2.0, 3.0, 4.0]]);
    check(
        Design::from_matrix(x, vec![1.0, f64::NAN, 2.0, 3.0], None, vec!["x".into()], keys(4), true),
        "y is not a finite number in row LK-02",
    );
}

#[test]
fn zero_and_negative_weights() {
    let mut spec = ModelSpec::new("rate", &["unemployment_pct"]);
    spec.weights = Some("residents".into());
    check(build(&spec), "the weight in row LK-02 is 0; weights must be positive finite numbers");
    spec.exclusions = vec![Exclusion { key: "LK-02".into(), reason: "boundary change".into() }];
    check(build(&spec), "the weight in row LK-05 is -5; weights must be positive finite numbers");
}

#[test]
fn duplicate_predictor() {
    check(
        build(&ModelSpec::new("rate", &["unemployment_pct", "vacancy_pct", "unemployment_pct"])),
        "unemployment_pct is listed more than once as a predictor",
    );
    // The same column twice under different transforms is two distinct terms (x and x²).
    let mut spec = ModelSpec::new("rate", &["unemployment_pct"]);
    spec.predictors.push(Predictor::transformed("unemployment_pct", Transform::Square));
    assert!(build(&spec).is_ok());
    let x = Matrix::from_columns(&[vec![1.0, 2.0, 3.0, 4.0], vec![2.0, 1.0, 0.0, 3.0]]);
    check(
        Design::from_matrix(x, vec![1.0, 2.0, 3.0, 4.0], None, vec!["x".into(), "x".into()], keys(4), true),
        "x is listed more than once as a predictor",
    );
}

#[test]
fn unknown_column() {
    check(build(&ModelSpec::new("rate", &["vacancy"])), "the table has no column named vacancy");
    check(build(&ModelSpec::new("incidents", &["vacancy_pct"])), "the table has no column named incidents");
}

#[test]
fn aliased_design_names_the_combination() {
    check(
        fit(&ModelSpec::new("rate", &["share_owners", "share_renters"])),
        "share_renters is an exact linear combination of share_owners and the intercept",
    );
}

#[test]
fn aliased_design_at_large_n() {
    // 100,000 rows: a column equal to 2·a − 3·b is still detected (rounding stays far below the
    // rank tolerance), and the message names both columns.
    let n: usize = 100_000;
    let a: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1000) as f64 / 997.0).collect();
    let b: Vec<f64> = (0..n).map(|i| ((i * 104_729) % 1013) as f64 / 1009.0).collect();
    let c: Vec<f64> = a.iter().zip(&b).map(|(x, y)| 2.0 * x - 3.0 * y).collect();
    let y: Vec<f64> = (0..n).map(|i| (i % 17) as f64).collect();
    let d = Design::from_matrix(
        Matrix::from_columns(&[a, b, c]),
        y,
        None,
        vec!["a".into(), "b".into(), "c".into()],
        (0..n).map(|i| i.to_string()).collect(),
        true,
    )
    .expect("design");
    check(Fit::new(&d, &FitOptions::default()), "c is an exact linear combination of a and b");
    // The rounding-level remaining length sits far below the default rank tolerance (1e-11).
    let qr = PivotedQr::factor(d.x(), &QrOptions::default());
    assert_eq!(qr.aliased_columns(), vec![3]);
    assert!(qr.remaining_lengths()[3] < 1e-13, "remaining length {:e}", qr.remaining_lengths()[3]);
}

#[test]
fn zero_column_is_aliased() {
    let x = Matrix::from_columns(&[vec![1.0, 2.0, 3.0, 4.0], vec![0.0; 4]]);
    let mut spec_d =
        Design::from_matrix(x, vec![1.0, 3.0, 2.0, 5.0], None, vec!["x".into(), "z".into()], keys(4), false)
            .expect("design");
    check(
        Fit::new(&spec_d, &FitOptions::default()),
        "z is zero in every row used, so its effect cannot be estimated",
    );
    spec_d = spec_d.select_terms(&[0]);
    assert!(Fit::new(&spec_d, &FitOptions::default()).is_ok());
}

#[test]
fn transform_outside_its_domain() {
    let mut spec = ModelSpec::new("rate", &[]);
    spec.predictors = vec![Predictor::transformed("vacancy_pct", Transform::Log)];
    check(build(&spec), "log(vacancy_pct) is undefined in row LK-02, where vacancy_pct is 0");
    spec.predictors = vec![Predictor::transformed("vacancy_pct", Transform::Reciprocal)];
    check(build(&spec), "1/vacancy_pct is undefined in row LK-02, where vacancy_pct is 0");
    spec.predictors = vec![Predictor::new("unemployment_pct")];
    spec.response_transform = Some(Transform::Power(f64::NAN));
    check(build(&spec), "the transform of rate is not valid: the power must be a finite number, not NaN");
}

#[test]
fn categorical_errors() {
    let mut spec = ModelSpec::new("rate", &[]);
    spec.predictors = vec![Predictor::categorical("district_type", "harbour")];
    check(build(&spec), "district_type has no level \"harbour\" among the rows used");
    check(
        build(&ModelSpec::new("rate", &["borough"])),
        "borough has only one level (\"north\") among the rows used, so it cannot be a predictor",
    );
    spec.predictors = vec![Predictor::categorical("vacancy_pct", "0")];
    check(build(&spec), "vacancy_pct is numeric, so it takes no reference level");
    spec.predictors = vec![Predictor::transformed("district_type", Transform::Log)];
    check(build(&spec), "district_type must be numeric to be used as the transformed predictor");
}

#[test]
fn spec_errors() {
    check(
        build(&ModelSpec::new("district_type", &["vacancy_pct"])),
        "district_type must be numeric to be used as the response",
    );
    check(
        build(&ModelSpec::new("rate", &["rate"])),
        "rate is the response, so it cannot also be a predictor",
    );
    let mut spec = ModelSpec::new("rate", &[]);
    spec.intercept = false;
    check(build(&spec), "the model has neither an intercept nor any predictor");
    spec = ModelSpec::new("rate", &["vacancy_pct"]);
    spec.weights = Some("district_type".into());
    check(build(&spec), "district_type must be numeric to be used as the weights");
    spec.weights = None;
    spec.exclusions = vec![Exclusion { key: "LK-99".into(), reason: "typo".into() }];
    check(build(&spec), "there is no row with key LK-99");
}

#[test]
fn table_errors() {
    check(Table::new(vec!["a".into(), "a".into()], vec![]), "the key a appears in more than one row");
    check(
        Table::new(keys(2), vec![Column::from_f64("x", &[1.0, 2.0]), Column::from_f64("x", &[1.0, 2.0])]),
        "the table has two columns named x",
    );
    check(
        Table::new(keys(2), vec![Column::from_f64("x", &[1.0])]),
        "number of values in column x: expected 2, found 1",
    );
}

#[test]
fn bad_confidence_level_and_prediction_inputs() {
    let f = fit(&ModelSpec::new("rate", &["unemployment_pct"])).expect("fit");
    check(f.conf_int(1.5), "the confidence level must lie strictly between 0 and 1; 1.5 was given");
    check(f.conf_int(0.0), "the confidence level must lie strictly between 0 and 1; 0 was given");
    let rows = Matrix::from_rows(&[vec![1.0, 5.0]]);
    check(
        f.predict(&rows, Some(&[0.0]), 0.95),
        "the weight in row 1 of the new rows is 0; weights must be positive finite numbers",
    );
    check(
        f.predict(&Matrix::from_rows(&[vec![1.0]]), None, 0.95),
        "number of values in a prediction row: expected 2, found 1",
    );
    check(
        f.predict(&Matrix::from_rows(&[vec![1.0, f64::NAN]]), None, 0.95),
        "unemployment_pct is not a finite number in row 1 of the new rows",
    );
    let d = f.design();
    check(d.row_for_prediction(&[]), "a value for unemployment_pct is needed to make a prediction");
    check(
        d.row_for_prediction(&[
            ("unemployment_pct".into(), PredictorValue::Number(4.0)),
            ("income".into(), PredictorValue::Number(1.0)),
        ]),
        "income is not a predictor in the model",
    );
    check(d.without_rows(&["LK-77".into()]), "there is no row with key LK-77");
}

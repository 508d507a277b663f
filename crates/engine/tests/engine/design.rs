//! Design building (listwise deletion, exclusions, transforms, treatment coding, prediction
//! rows, term and row selection) and fits whose results follow from textbook identities.

use wardcast_engine::{
    Column, Design, DroppedRow, Exclusion, Fit, FitOptions, Matrix, ModelSpec, Predictor, PredictorValue,
    Table, Transform,
};

use crate::common::assert_close;

fn keys(n: usize) -> Vec<String> {
    (1..=n).map(|i| format!("LK-{i:02}")).collect()
}

fn table() -> Table {
    Table::new(
        keys(9),
        vec![
            Column::numeric(
                "rate",
                vec![
                    Some(3.0),
                    Some(5.0),
                    Some(4.0),
                    None,
                    Some(9.0),
                    Some(7.0),
                    Some(8.0),
                    Some(1.0),
                    Some(2.0),
                ],
            ),
            Column::numeric(
                "vacancy_pct",
                vec![Some(1.0), None, Some(2.0), None, Some(4.0), Some(3.0), Some(5.0), Some(2.5), Some(6.0)],
            ),
            Column::from_f64("unemployment_pct", &[4.0, 6.0, 5.0, 7.0, 9.0, 8.0, 8.5, 2.0, 3.0]),
            Column::from_strs(
                "district_type",
                &[
                    "mixed",
                    "mixed",
                    "mixed",
                    "centre",
                    "centre",
                    "centre",
                    "centre",
                    "residential",
                    "residential",
                ],
            ),
        ],
    )
    .expect("table")
}

#[test]
fn listwise_deletion_and_exclusions_are_recorded_by_key() {
    let mut spec = ModelSpec::new("rate", &["vacancy_pct", "unemployment_pct"]);
    spec.exclusions = vec![Exclusion { key: "LK-06".into(), reason: "boundary changed mid-year".into() }];
    let d = Design::build(&table(), &spec).expect("design");
    assert_eq!(
        d.dropped(),
        &[
            DroppedRow { key: "LK-02".into(), reason: "missing value in vacancy_pct".into() },
            DroppedRow { key: "LK-04".into(), reason: "missing values in rate and vacancy_pct".into() },
            DroppedRow { key: "LK-06".into(), reason: "excluded: boundary changed mid-year".into() },
        ]
    );
    assert_eq!(d.keys(), &["LK-01", "LK-03", "LK-05", "LK-07", "LK-08", "LK-09"]);
    assert_eq!(d.y(), &[3.0, 4.0, 9.0, 8.0, 1.0, 2.0]);
    assert_eq!(d.column_names(), &["(intercept)", "vacancy_pct", "unemployment_pct"]);
    // A column the model does not use does not cause deletion.
    let d2 = Design::build(&table(), &ModelSpec::new("rate", &["unemployment_pct"])).expect("design");
    assert_eq!(d2.nrows(), 8);
}

#[test]
fn transforms_apply_to_response_and_predictors() {
    let mut spec = ModelSpec::new("rate", &[]);
    spec.response_transform = Some(Transform::Log);
    spec.predictors = vec![
        Predictor::transformed("vacancy_pct", Transform::Sqrt),
        Predictor::transformed("unemployment_pct", Transform::Power(-1.0)),
    ];
    let d = Design::build(&table(), &spec).expect("design");
    assert_eq!(d.response_label(), "log(rate)");
    assert_eq!(d.column_names(), &["(intercept)", "sqrt(vacancy_pct)", "unemployment_pct^-1"]);
    assert_eq!(d.y()[0], 3.0_f64.ln());
    assert_eq!(d.x().get(0, 1), 1.0);
    assert_eq!(d.x().get(1, 2), 0.2);
}

#[test]
fn treatment_coding_and_reference_level() {
    let spec = ModelSpec::new("rate", &["district_type"]);
    let d = Design::build(&table(), &spec).expect("design");
    // Default reference: the first level in sorted order ("centre").
    assert_eq!(d.column_names(), &["(intercept)", "district_type=mixed", "district_type=residential"]);
    assert_eq!(d.terms()[0].label, "district_type");
    assert_eq!(d.terms()[0].columns, 1..3);
    assert_eq!(d.x().column(1), &[1.0, 1.0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0]);

    let mut spec = ModelSpec::new("rate", &[]);
    spec.predictors = vec![Predictor::categorical("district_type", "residential")];
    let d = Design::build(&table(), &spec).expect("design");
    assert_eq!(d.column_names(), &["(intercept)", "district_type=centre", "district_type=mixed"]);
}

#[test]
fn one_way_layout_gives_group_means_and_the_anova_f() {
    // With treatment coding the intercept is the reference group's mean and each dummy the
    // difference of its group's mean from it; the term's F is the one-way ANOVA F
    // (Kutner, Nachtsheim, Neter & Li 2004, ch. 16, eqs. 16.32–16.46, and §8.3 on indicator
    // variables). Rows used: mixed {3, 5, 4}, centre {9, 7, 8} (LK-04 has no rate),
    // residential {1, 2}.
    let d = Design::build(&table(), &ModelSpec::new("rate", &["district_type"])).expect("design");
    let f = Fit::new(&d, &FitOptions::default()).expect("fit");
    let (centre, mixed, resid) = (8.0, 4.0, 1.5);
    assert_close("intercept", f.coefficients()[0], centre, 1e-14, 0.0);
    assert_close("mixed", f.coefficients()[1], mixed - centre, 1e-14, 0.0);
    assert_close("residential", f.coefficients()[2], resid - centre, 1e-14, 0.0);
    let grand = (12.0 + 24.0 + 3.0) / 8.0;
    let ssb = 3.0 * (mixed - grand).powi(2) + 3.0 * (centre - grand).powi(2) + 2.0 * (resid - grand).powi(2);
    let ssw = 2.0 + 2.0 + 0.5;
    let f_oneway = (ssb / 2.0) / (ssw / 5.0);
    assert_close("SSE", f.sse(), ssw, 1e-13, 0.0);
    assert_close("global F", f.f_statistic().expect("F"), f_oneway, 1e-12, 0.0);
    let pf = &f.partial_f_tests()[0];
    assert_eq!((pf.term.as_str(), pf.df), ("district_type", 2));
    assert_close("partial F", pf.f.expect("F"), f_oneway, 1e-12, 0.0);
    assert_close("sequential SS", f.sequential_anova()[0].ss, ssb, 1e-12, 0.0);
    assert_close("partial p", pf.p.expect("p"), f.f_p_value().expect("p"), 1e-12, 0.0);
}

#[test]
fn prediction_rows_term_and_row_selection() {
    let d = Design::build(&table(), &ModelSpec::new("rate", &["unemployment_pct", "district_type"]))
        .expect("design");
    let row = d
        .row_for_prediction(&[
            ("district_type".into(), PredictorValue::Level("mixed".into())),
            ("unemployment_pct".into(), PredictorValue::Number(5.5)),
        ])
        .expect("row");
    assert_eq!(row, vec![1.0, 5.5, 1.0, 0.0]);
    let f = Fit::new(&d, &FitOptions::default()).expect("fit");
    let p = f.predict(&Matrix::from_rows(std::slice::from_ref(&row)), None, 0.95).expect("prediction");
    let by_hand: f64 = row.iter().zip(f.coefficients()).map(|(a, b)| a * b).sum();
    assert_close("prediction", p[0].fit, by_hand, 1e-13, 1.0);
    assert!(p[0].pred_int.0 < p[0].mean_ci.0 && p[0].mean_ci.1 < p[0].pred_int.1);

    let sub = d.select_terms(&[1]);
    assert_eq!(sub.column_names(), &["(intercept)", "district_type=mixed", "district_type=residential"]);
    assert_eq!(sub.terms()[0].columns, 1..3);
    assert_eq!(sub.spec().predictors.len(), 1);

    let fewer = d.without_rows(&["LK-01".into()]).expect("rows");
    assert_eq!(fewer.nrows(), d.nrows() - 1);
    assert_eq!(fewer.dropped().last(), Some(&DroppedRow { key: "LK-01".into(), reason: "left out".into() }));
}

#[test]
fn exact_fit_is_a_result_with_undefined_tests() {
    // y = 1 + 2x + 0.5x² exactly: SEs 0, F infinite, t and p undefined, with a note.
    let x: Vec<f64> = (0..10).map(f64::from).collect();
    let y: Vec<f64> = x.iter().map(|v| 1.0 + 2.0 * v + 0.5 * v * v).collect();
    let x2: Vec<f64> = x.iter().map(|v| v * v).collect();
    let d = Design::from_matrix(
        Matrix::from_columns(&[x, x2]),
        y,
        None,
        vec!["x".into(), "x^2".into()],
        keys(10),
        true,
    )
    .expect("design");
    let f = Fit::new(&d, &FitOptions::default()).expect("fit");
    assert!(f.is_exact_fit());
    for (b, want) in f.coefficients().iter().zip([1.0, 2.0, 0.5]) {
        assert_close("coefficient", *b, want, 4.0 * f64::EPSILON, 0.0);
    }
    assert!(f.std_errors().iter().all(|s| *s == 0.0));
    assert!(f.t_values().iter().all(Option::is_none));
    assert!(f.p_values().iter().all(Option::is_none));
    assert_eq!(f.f_statistic(), Some(f64::INFINITY));
    assert_eq!(f.f_p_value(), None);
    assert_eq!(f.r_squared(), 1.0);
    assert!(f.notes().iter().any(|n| n.contains("fits the data exactly")));
    let ci = f.conf_int(0.95).expect("ci");
    assert_eq!(ci[1], (f.coefficients()[1], f.coefficients()[1]));
}

#[test]
fn integer_weights_equal_replicated_rows() {
    // Weighted least squares with integer weights wᵢ gives the coefficients, SSE and SSTO of
    // ordinary least squares on the data with row i repeated wᵢ times (Kutner et al. 2004,
    // §11.1: WLS minimises Σ wᵢ eᵢ²).
    let x = [1.0, 2.0, 3.5, 4.0, 6.0, 7.5];
    let y = [2.1, 2.9, 5.2, 4.8, 8.1, 9.7];
    let w = [1.0, 3.0, 2.0, 1.0, 4.0, 2.0];
    let dw = Design::from_matrix(
        Matrix::from_columns(&[x.to_vec()]),
        y.to_vec(),
        Some(w.to_vec()),
        vec!["x".into()],
        keys(6),
        true,
    )
    .expect("design");
    let fw = Fit::new(&dw, &FitOptions::default()).expect("fit");
    let (mut xr, mut yr) = (Vec::new(), Vec::new());
    for i in 0..6 {
        for _ in 0..w[i] as usize {
            xr.push(x[i]);
            yr.push(y[i]);
        }
    }
    let n = xr.len();
    let dr = Design::from_matrix(Matrix::from_columns(&[xr]), yr, None, vec!["x".into()], keys(n), true)
        .expect("design");
    let fr = Fit::new(&dr, &FitOptions::default()).expect("fit");
    for k in 0..2 {
        assert_close("coefficient", fw.coefficients()[k], fr.coefficients()[k], 1e-13, 0.0);
    }
    assert_close("SSE", fw.sse(), fr.sse(), 1e-12, 0.0);
    assert_close("SSTO", fw.ssto(), fr.ssto(), 1e-13, 0.0);
    assert_close("R²", fw.r_squared(), fr.r_squared(), 1e-13, 0.0);
    // Raw residuals are reported unweighted.
    for ((r, yi), fi) in fw.residuals().iter().zip(&y).zip(fw.fitted()) {
        assert_close("residual", *r, yi - fi, 1e-13, 1.0);
    }
}

//! Area numerics: column summaries, pairwise-complete correlations, and leave-one-out
//! prediction intervals checked against brute-force refits without each area.

use wardcast_engine::areas::{deleted_intervals, pairwise_pearson, summarise};
use wardcast_engine::{Column, Design, Fit, FitOptions, Matrix, ModelSpec, Table};

use crate::common::assert_close;

/// A small invented table: a response, two indicators and a weight column.
fn table() -> Table {
    let x1 = [2.0, 4.5, 3.1, 7.2, 5.5, 6.1, 1.9, 8.4, 3.3, 4.8, 9.1, 2.7];
    let x2 = [10.0, 12.5, 9.1, 14.0, 11.2, 15.8, 8.7, 13.3, 12.2, 9.9, 16.1, 10.4];
    let y: Vec<f64> = x1
        .iter()
        .zip(&x2)
        .enumerate()
        .map(|(i, (a, b))| {
            3.0 + 1.7 * a - 0.4 * b + [0.9, -1.2, 0.3, 2.1, -0.7, 0.2, -1.9, 0.8, 1.4, -0.3, -2.2, 0.6][i]
        })
        .collect();
    let w = [1.0, 2.0, 0.5, 1.5, 3.0, 1.0, 2.5, 0.8, 1.2, 2.2, 1.1, 0.9];
    let keys = (0..12).map(|i| format!("A-{i:02}")).collect();
    Table::new(
        keys,
        vec![
            Column::from_f64("y", &y),
            Column::from_f64("x1", &x1),
            Column::from_f64("x2", &x2),
            Column::from_f64("w", &w),
        ],
    )
    .expect("table")
}

/// Checks the deletion formulas against refits without each row, for one spec.
fn check_against_refits(spec: &ModelSpec) {
    let design = Design::build(&table(), spec).expect("design");
    let fit = Fit::new(&design, &FitOptions::default()).expect("fit");
    let intervals = deleted_intervals(&fit, 0.95).expect("intervals");
    let n = design.nrows();
    assert_eq!(intervals.rows.len(), n);
    assert_eq!(intervals.df, n - design.ncols() - 1);
    for i in 0..n {
        let row = &intervals.rows[i];
        let keep: Vec<usize> = (0..n).filter(|&j| j != i).collect();
        let without = Fit::new(&design.select_rows(&keep), &FitOptions::default()).expect("refit");
        let x0 = Matrix::from_rows(&[design.x().row(i)]);
        let w0 = design.weights().map(|w| vec![w[i]]);
        let pred = &without.predict(&x0, w0.as_deref(), 0.95).expect("predict")[0];
        let what = |q: &str| {
            format!("{q} of row {i} ({})", if spec.weights.is_some() { "weighted" } else { "unweighted" })
        };
        assert_close(&what("centre"), row.deleted_prediction.expect("centre"), pred.fit, 1e-9, 1.0);
        assert_close(&what("low"), row.low().expect("low"), pred.pred_int.0, 1e-9, 1.0);
        assert_close(&what("high"), row.high().expect("high"), pred.pred_int.1, 1e-9, 1.0);
        assert_close(&what("deleted sd"), row.deleted_sd.expect("sd"), without.sigma(), 1e-9, 1e-12);
        let t = row.studentized_deleted.expect("t");
        let outside = row.observed < pred.pred_int.0 || row.observed > pred.pred_int.1;
        assert_eq!(intervals.outside(i), Some(outside), "{}", what("flag"));
        assert_eq!(outside, t.abs() > intervals.t_critical.expect("t crit"), "{}", what("flag rule"));
    }
}

#[test]
fn deleted_intervals_match_refits_without_each_area() {
    let mut spec = ModelSpec::new("y", &["x1", "x2"]);
    check_against_refits(&spec);
    spec.weights = Some("w".into());
    check_against_refits(&spec);
}

#[test]
fn deleted_intervals_reject_a_bad_level() {
    let design = Design::build(&table(), &ModelSpec::new("y", &["x1"])).expect("design");
    let fit = Fit::new(&design, &FitOptions::default()).expect("fit");
    for level in [0.0, 1.0, -0.5, f64::NAN] {
        assert!(deleted_intervals(&fit, level).is_err(), "level {level}");
    }
}

#[test]
fn summaries_count_missing_cells_and_use_definition_seven_quartiles() {
    let values = [Some(4.0), None, Some(1.0), Some(f64::NAN), Some(3.0), Some(2.0), Some(10.0)];
    let s = summarise(&values);
    assert_eq!((s.n, s.missing), (5, 2));
    assert_close("mean", s.mean.expect("mean"), 4.0, 1e-15, 1.0);
    // Sample variance of 1, 2, 3, 4, 10: (9 + 4 + 1 + 0 + 36) / 4 = 12.5.
    assert_close("sd", s.sd.expect("sd"), 12.5f64.sqrt(), 1e-15, 1.0);
    assert_eq!(s.quartiles, Some([1.0, 2.0, 3.0, 4.0, 10.0]));
    let even = summarise(&[Some(1.0), Some(2.0), Some(3.0), Some(4.0)]);
    assert_eq!(even.quartiles, Some([1.0, 1.75, 2.5, 3.25, 4.0]));
    let one = summarise(&[Some(7.0)]);
    assert_eq!((one.n, one.sd, one.quartiles), (1, None, Some([7.0; 5])));
    let none = summarise(&[None, None]);
    assert_eq!((none.n, none.missing, none.mean), (0, 2, None));
}

#[test]
fn correlations_use_pairwise_complete_rows() {
    let a = [Some(1.0), Some(2.0), Some(3.0), Some(4.0), None];
    let b = [Some(2.0), Some(4.0), Some(6.0), Some(8.5), Some(1.0)];
    let c = [Some(5.0), None, Some(5.0), Some(5.0), Some(5.0)];
    let pc = pairwise_pearson(&[&a, &b, &c]).expect("correlations");
    assert_eq!(pc.rows, vec![vec![4, 4, 3], vec![4, 5, 4], vec![3, 4, 4]]);
    // On rows 0..4, b is nearly 2a: the exact r by hand.
    let (xs, ys) = ([1.0, 2.0, 3.0, 4.0], [2.0, 4.0, 6.0, 8.5]);
    let (mx, my) = (2.5, 5.125);
    let sxy: f64 = xs.iter().zip(&ys).map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = xs.iter().map(|x| (x - mx) * (x - mx)).sum();
    let syy: f64 = ys.iter().map(|y| (y - my) * (y - my)).sum();
    assert_close("r(a, b)", pc.r[0][1].expect("r"), sxy / (sxx * syy).sqrt(), 1e-14, 1.0);
    assert_eq!(pc.r[0][1], pc.r[1][0]);
    assert_eq!(pc.r[0][0], Some(1.0));
    // A constant column has no correlation with anything, itself included.
    assert_eq!((pc.r[2][0], pc.r[2][2]), (None, None));
    let short = [Some(1.0)];
    assert!(pairwise_pearson(&[&a, &short]).is_err());
}

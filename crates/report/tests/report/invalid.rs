//! Data that cannot be drawn as given gets a typed error with a plain message, never a panic.

use wardcast_report::ReportError;
use wardcast_report::svg::{
    Axis, BarChart, BarGroup, Bins, Chart, CorrelationHeatMap, EffectPlot, EffectRow, Histogram,
};

/// Renders `chart` and asserts a chart error whose message contains `expected`.
fn check(case: &str, chart: &dyn Chart, expected: &str) {
    match chart.render() {
        Err(ReportError::Chart { reason, .. }) => {
            assert!(reason.contains(expected), "{case}: message {reason:?} lacks {expected:?}");
        }
        Err(other) => panic!("{case}: unexpected error {other}"),
        Ok(_) => panic!("{case}: rendered although the data is invalid"),
    }
}

fn histogram(bins: Bins) -> Histogram {
    Histogram {
        title: "Residuals".into(),
        axis: Axis::new("Residual", ""),
        values: vec![1.0, 2.0, 3.0],
        bins,
        ..Default::default()
    }
}

#[test]
fn invalid_chart_data_is_refused_with_a_plain_message() {
    let cases: Vec<(&str, Box<dyn Chart>, &str)> = vec![
        (
            "heat map with a missing row",
            Box::new(CorrelationHeatMap {
                labels: vec!["a".into(), "b".into()],
                values: vec![vec![1.0, 0.5]],
                ..Default::default()
            }),
            "2 labels but 1 rows",
        ),
        (
            "heat map with a short row",
            Box::new(CorrelationHeatMap {
                labels: vec!["a".into(), "b".into()],
                values: vec![vec![1.0, 0.5], vec![0.5]],
                ..Default::default()
            }),
            "row 2 has 1 values",
        ),
        (
            "effect interval upside down",
            Box::new(EffectPlot {
                rows: vec![EffectRow { label: "Unemployment".into(), estimate: 1.0, low: 2.0, high: 0.5 }],
                ..Default::default()
            }),
            "lower end above its upper end",
        ),
        (
            "bar group with too few values",
            Box::new(BarChart {
                series: vec!["Budget".into(), "Proposed".into()],
                groups: vec![BarGroup { label: "LK-01".into(), values: vec![1.0] }],
                ..Default::default()
            }),
            "\"LK-01\" has 1 values",
        ),
        ("histogram with no bins", Box::new(histogram(Bins::Count(0))), "at least 1"),
        ("histogram with a negative width", Box::new(histogram(Bins::Width(-1.0))), "positive number"),
        ("histogram with a NaN width", Box::new(histogram(Bins::Width(f64::NAN))), "positive number"),
        ("histogram with too many bins", Box::new(histogram(Bins::Width(1e-6))), "at most 200 bins"),
    ];
    for (case, chart, expected) in &cases {
        check(case, chart.as_ref(), expected);
    }
}

#[test]
fn empty_charts_render_with_a_message_instead_of_failing() {
    let charts: Vec<Box<dyn Chart>> = vec![
        Box::new(CorrelationHeatMap { title: "Empty".into(), ..Default::default() }),
        Box::new(EffectPlot { title: "Empty".into(), ..Default::default() }),
        Box::new(BarChart { title: "Empty".into(), ..Default::default() }),
        Box::new(histogram(Bins::Auto)),
    ];
    for chart in &charts {
        let svg = chart.render().expect("an empty chart still renders");
        super::support::assert_invariants("empty chart", &svg);
    }
}

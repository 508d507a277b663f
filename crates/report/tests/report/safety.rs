//! Hostile text and hostile numbers: every chart kind escapes user text and never prints NaN.

use super::support::{assert_invariants, element_text};
use wardcast_report::svg::{
    Axis, BarChart, BarGroup, Bins, Callout, Chart, CorrelationHeatMap, EffectPlot, EffectRow, Histogram,
    LinePlot, LineSeries, Marker, PointLabels, QqLine, QqPlot, QqPoint, Reference, Scatter, ScatterPoint,
    Threshold, XTicks,
};

/// A name that breaks markup unless it is escaped.
const EVIL: &str = "<script>\"'&";
/// The same name, escaped for XML.
const EVIL_ESCAPED: &str = "&lt;script&gt;&quot;&apos;&amp;";

/// One chart of every kind, with every piece of user text set to `text` and the numbers from `v`.
fn every_kind(text: &str, v: &dyn Fn(usize) -> f64) -> Vec<(&'static str, Box<dyn Chart>)> {
    let axis = || Axis::new(text, text);
    vec![
        (
            "scatter",
            Box::new(Scatter {
                title: text.into(),
                x_axis: axis(),
                y_axis: axis(),
                items: text.into(),
                points: (0..6)
                    .map(|i| {
                        let p = ScatterPoint::new(v(i), v(i + 1)).labelled(text);
                        if i == 2 { p.flagged() } else { p }
                    })
                    .collect(),
                references: vec![
                    Reference::Horizontal { y: v(7), label: text.into() },
                    Reference::Line { intercept: v(8), slope: v(9), label: text.into() },
                    Reference::Curve {
                        points: (0..4).map(|i| (v(i), v(i + 2))).collect(),
                        label: text.into(),
                    },
                ],
                labels: PointLabels::All,
                flagged_meaning: text.into(),
                summary: text.into(),
            }),
        ),
        (
            "effect",
            Box::new(EffectPlot {
                title: text.into(),
                axis: axis(),
                rows: (0..3)
                    .map(|i| EffectRow {
                        label: text.into(),
                        estimate: v(i),
                        low: v(i) - 1.0,
                        high: v(i) + 1.0,
                    })
                    .collect(),
                interval_name: text.into(),
                reference: Some(v(5)),
                reference_label: text.into(),
                decimals: None,
                summary: text.into(),
            }),
        ),
        (
            "line",
            Box::new(LinePlot {
                title: text.into(),
                x_axis: axis(),
                y_axis: axis(),
                series: vec![
                    LineSeries { name: text.into(), points: (0..5).map(|i| (i as f64, v(i))).collect() },
                    LineSeries { name: text.into(), points: (0..5).map(|i| (v(i), v(i + 3))).collect() },
                ],
                x_ticks: XTicks::Integers,
                callouts: vec![Callout { x: v(1), y: v(2), label: text.into() }],
                summary: text.into(),
            }),
        ),
        (
            "histogram",
            Box::new(Histogram {
                title: text.into(),
                axis: axis(),
                items: text.into(),
                values: (0..9).map(v).collect(),
                bins: Bins::Auto,
                markers: vec![Marker { x: v(3), label: text.into() }],
                summary: text.into(),
            }),
        ),
        (
            "qq",
            Box::new(QqPlot {
                title: text.into(),
                x_axis: axis(),
                y_axis: axis(),
                items: text.into(),
                points: (0..7)
                    .map(|i| QqPoint {
                        theoretical: v(i),
                        sample: v(i + 1),
                        label: Some(text.into()),
                        emphasis: Default::default(),
                    })
                    .collect(),
                line: QqLine::Quartiles,
                labels: PointLabels::All,
                flagged_meaning: text.into(),
                summary: text.into(),
            }),
        ),
        (
            "heatmap",
            Box::new(CorrelationHeatMap {
                title: text.into(),
                labels: vec![text.into(), text.into(), text.into()],
                values: (0..3).map(|i| (0..3).map(|j| v(i * 3 + j) / 10.0).collect()).collect(),
                measure: text.into(),
                decimals: None,
                summary: text.into(),
            }),
        ),
        (
            "bar",
            Box::new(BarChart {
                title: text.into(),
                axis: axis(),
                items: text.into(),
                series: vec![text.into(), text.into()],
                groups: (0..3)
                    .map(|i| BarGroup { label: text.into(), values: vec![v(i), v(i + 4)] })
                    .collect(),
                threshold: Some(Threshold { value: v(2), label: text.into() }),
                decimals: None,
                summary: text.into(),
            }),
        ),
    ]
}

#[test]
fn user_text_is_escaped_in_every_chart_kind() {
    let numbers = |i: usize| ((i * 7) % 11) as f64 - 4.0;
    for (kind, chart) in every_kind(EVIL, &numbers) {
        let svg = chart.render().unwrap_or_else(|e| panic!("{kind}: {e}"));
        assert_invariants(kind, &svg);
        assert!(!svg.contains("<script"), "{kind}: raw markup leaked");
        assert!(!svg.contains("\"'&"), "{kind}: raw quotes or ampersand leaked");
        assert!(svg.contains(EVIL_ESCAPED), "{kind}: the escaped name is missing");
        let title = element_text(&svg, "title").expect("a title");
        assert_eq!(title, EVIL_ESCAPED, "{kind}: the title is the escaped name");
    }
}

#[test]
fn control_characters_are_dropped_so_the_document_stays_valid() {
    let numbers = |i: usize| i as f64;
    for (kind, chart) in every_kind("bell\u{7}tab\tnul\u{0}end", &numbers) {
        let svg = chart.render().unwrap_or_else(|e| panic!("{kind}: {e}"));
        assert!(!svg.contains('\u{7}') && !svg.contains('\u{0}'), "{kind}: a control character leaked");
        assert!(svg.contains("belltab nulend"), "{kind}: the rest of the text is kept");
    }
}

/// A named rule giving the i-th number of a chart's data.
type Pattern = (&'static str, Box<dyn Fn(usize) -> f64>);

/// Number patterns: every value non-finite, a mixture, huge magnitudes, and all equal.
#[test]
fn non_finite_and_degenerate_numbers_never_reach_the_output() {
    let patterns: Vec<Pattern> = vec![
        ("all NaN", Box::new(|_| f64::NAN)),
        ("all infinite", Box::new(|i| if i % 2 == 0 { f64::INFINITY } else { f64::NEG_INFINITY })),
        (
            "mixed",
            Box::new(|i| match i % 4 {
                0 => f64::NAN,
                1 => f64::INFINITY,
                _ => i as f64,
            }),
        ),
        ("huge", Box::new(|i| if i % 2 == 0 { 1e300 } else { -1e300 })),
        ("constant", Box::new(|_| 3.0)),
        ("tiny", Box::new(|i| i as f64 * 1e-300)),
    ];
    for (pattern, numbers) in &patterns {
        for (kind, chart) in every_kind("Indicator", numbers.as_ref()) {
            let name = format!("{kind} with {pattern} values");
            let svg = chart.render().unwrap_or_else(|e| panic!("{name}: {e}"));
            assert_invariants(&name, &svg);
        }
    }
}

#[test]
fn skipped_points_are_reported_in_the_text_alternative() {
    let numbers = |i: usize| if i == 2 { f64::NAN } else { i as f64 };
    for (kind, chart) in every_kind("Indicator", &numbers) {
        let svg = chart.render().unwrap_or_else(|e| panic!("{kind}: {e}"));
        let desc = element_text(&svg, "desc").expect("a desc");
        let said = ["not shown", "not counted", "no value", "could not be drawn", "no interval"]
            .iter()
            .any(|phrase| desc.contains(phrase));
        assert!(said, "{kind}: the text alternative does not mention the skipped value: {desc}");
    }
}

#[test]
fn output_is_identical_on_every_render() {
    let numbers = |i: usize| (i as f64).sqrt() * 3.3;
    for ((kind, a), (_, b)) in every_kind("Indicator", &numbers).iter().zip(every_kind("Indicator", &numbers))
    {
        assert_eq!(a.render().ok(), b.render().ok(), "{kind}: rendering is not deterministic");
    }
}

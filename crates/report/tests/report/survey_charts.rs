//! The scatter-plot matrix and the interval strip: snapshots, escaping, hostile numbers and
//! the data errors they refuse.

use super::support::{assert_invariants, check, element_text};
use wardcast_report::svg::{
    Axis, Chart, Emphasis, IntervalStrip, MATRIX_MAX_MEASURES, MatrixMeasure, ScatterMatrix, StripRow,
};

/// A name that breaks markup unless it is escaped.
const EVIL: &str = "<script>\"'&";
/// The same name, escaped for XML.
const EVIL_ESCAPED: &str = "&lt;script&gt;&quot;&apos;&amp;";

fn matrix(text: &str, k: usize, v: &dyn Fn(usize, usize) -> f64) -> ScatterMatrix {
    ScatterMatrix {
        title: if text.is_empty() { "Indicators side by side".into() } else { text.into() },
        measures: (0..k)
            .map(|m| MatrixMeasure {
                axis: if text.is_empty() {
                    Axis::new(format!("Measure {m}"), "% of residents")
                } else {
                    Axis::new(text, text)
                },
                values: (0..12).map(|i| v(m, i)).collect(),
            })
            .collect(),
        items: if text.is_empty() { "districts".into() } else { text.into() },
        summary: text.into(),
    }
}

fn strip(text: &str, v: &dyn Fn(usize) -> f64) -> IntervalStrip {
    IntervalStrip {
        title: if text.is_empty() { "Observed against expected".into() } else { text.into() },
        axis: if text.is_empty() { Axis::new("Rate", "per 10,000 residents") } else { Axis::new(text, text) },
        items: if text.is_empty() { "districts".into() } else { text.into() },
        rows: (0..8)
            .map(|i| StripRow {
                label: if text.is_empty() { format!("D-{i:02}") } else { text.into() },
                observed: v(i) + if i == 5 { 9.0 } else { 0.5 },
                predicted: v(i),
                low: v(i) - 3.0,
                high: v(i) + 3.0,
                emphasis: if i == 5 { Emphasis::Flagged } else { Emphasis::Normal },
            })
            .collect(),
        interval_name: if text.is_empty() { "95% interval without the district".into() } else { text.into() },
        flagged_meaning: if text.is_empty() { "Outside its interval".into() } else { text.into() },
        summary: text.into(),
    }
}

fn smooth(m: usize, i: usize) -> f64 {
    (i as f64) * (m as f64 + 1.0) * 0.7 + ((i * 7 + m * 3) % 5) as f64
}

#[test]
fn the_matrix_and_the_strip_match_their_snapshots() {
    let svg = check("scatter_matrix_four", &matrix("", 4, &smooth));
    assert_eq!(svg.matches("<circle").count(), 6 * 12, "six panels below the diagonal, twelve points each");
    let desc = element_text(&svg, "desc").expect("desc");
    assert!(desc.contains("Measure 4: Measure 3 (% of residents), from"), "{desc}");
    let svg = check("interval_strip_eight", &strip("", &|i| 10.0 + 2.0 * i as f64));
    assert_eq!(svg.matches("<path d=").count(), 2, "one flagged row and its legend swatch as diamonds");
    let desc = element_text(&svg, "desc").expect("desc");
    assert!(desc.contains("1 district drawn as diamonds (outside its interval): D-05"), "{desc}");
}

#[test]
fn user_text_is_escaped() {
    let charts: Vec<(&str, Box<dyn Chart>)> =
        vec![("matrix", Box::new(matrix(EVIL, 3, &smooth))), ("strip", Box::new(strip(EVIL, &|i| i as f64)))];
    for (name, chart) in charts {
        let svg = chart.render().expect("render");
        assert_invariants(name, &svg);
        assert!(!svg.contains(EVIL), "{name}: raw user text");
        assert!(svg.contains(EVIL_ESCAPED), "{name}: the escaped name is missing");
    }
}

#[test]
fn missing_and_non_finite_values_are_skipped_and_reported() {
    let holes = |m: usize, i: usize| match (m, i) {
        (0, 3) => f64::NAN,
        (1, 4) => f64::INFINITY,
        _ => smooth(m, i),
    };
    let svg = matrix("", 3, &holes).render().expect("render");
    assert_invariants("matrix with holes", &svg);
    let desc = element_text(&svg, "desc").expect("desc");
    assert!(desc.contains("Measure 1: Measure 0 (% of residents), from 0 to 9.700, 1 missing."), "{desc}");
    let svg = strip("", &|i| if i == 2 { f64::NAN } else { i as f64 }).render().expect("render");
    assert_invariants("strip with holes", &svg);
    assert!(svg.contains("1 district not drawn"), "the note reports the skipped row");
}

#[test]
fn impossible_data_is_refused_with_a_reason() {
    for k in [0, 1, MATRIX_MAX_MEASURES + 1] {
        let err = matrix("", k, &smooth).render().expect_err("too few or too many measures");
        assert!(err.to_string().contains("measures"), "{err}");
    }
    let mut uneven = matrix("", 3, &smooth);
    uneven.measures[2].values.pop();
    assert!(uneven.render().expect_err("uneven").to_string().contains("11 values"));
    let mut upside_down = strip("", &|i| i as f64);
    upside_down.rows[1].low = 50.0;
    assert!(upside_down.render().expect_err("bad interval").to_string().contains("lower end above"));
}

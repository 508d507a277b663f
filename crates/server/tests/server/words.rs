//! Wording: number formatting, matching terms to the spec, and comparison sentences.

use wardcast::web::words::{
    Estimate, TermKind, Wording, classify_terms, comparison_sentence, fmt_level, fmt_p, fmt_plain, fmt_sig,
};
use wardcast::web::{ColumnInfo, Glossary};
use wardcast_contract::spec::{ModelSpec, PredictorSpec, TransformSpec};

#[test]
fn numbers_are_rounded_to_significant_digits() {
    let cases: [(f64, usize, &str); 18] = [
        (0.0, 3, "0"),
        (2.25, 3, "2.25"),
        (-6.5, 3, "-6.50"),
        (3.14259, 3, "3.14"),
        (9.996, 3, "10.0"),
        (0.012345, 2, "0.012"),
        (1234.5, 3, "1,230"),
        (1234567.0, 4, "1,235,000"),
        (-98765.4, 5, "-98,765"),
        (0.5, 1, "0.5"),
        (123.0, 1, "100"),
        (1.0e-5, 3, "1.00e-5"),
        (-2.5e13, 2, "-2.5e13"),
        (f64::INFINITY, 3, "infinite"),
        (f64::NEG_INFINITY, 3, "minus infinite"),
        (f64::NAN, 3, "undefined"),
        (0.00012, 2, "0.00012"),
        (999.96, 4, "1,000"),
    ];
    for (x, sig, expected) in cases {
        assert_eq!(fmt_sig(x, sig), expected, "fmt_sig({x}, {sig})");
    }
}

#[test]
fn plain_numbers_levels_and_p_values() {
    let plain = [(1.0, "1"), (0.5, "0.5"), (1000.0, "1,000"), (2.25, "2.25"), (0.1, "0.1")];
    for (x, expected) in plain {
        assert_eq!(fmt_plain(x), expected, "fmt_plain({x})");
    }
    assert_eq!(fmt_level(0.95), "95");
    assert_eq!(fmt_level(0.995), "99.5");
    let ps = [
        (Some(0.5), "p = 0.50"),
        (Some(0.032), "p = 0.032"),
        (Some(0.00012), "p = 0.00012"),
        (Some(0.0001), "p = 0.00010"),
        (Some(0.00009), "p < 0.0001"),
        (Some(1e-15), "p < 0.0001"),
        (Some(f64::NAN), "p undefined"),
        (None, "p undefined"),
    ];
    for (p, expected) in ps {
        assert_eq!(fmt_p(p), expected, "fmt_p({p:?})");
    }
}

fn predictor(column: &str, transform: Option<TransformSpec>, reference: Option<&str>) -> PredictorSpec {
    PredictorSpec { column: column.into(), transform, reference_level: reference.map(str::to_owned) }
}

#[test]
fn terms_are_matched_to_the_spec_in_order() {
    let mut spec = ModelSpec::new("rate", ["a"]);
    spec.predictors.push(predictor("type", None, None));
    spec.predictors.push(predictor("b", Some(TransformSpec::Log), None));
    spec.predictors.push(predictor("ab", None, None));
    let terms: Vec<String> =
        ["a", "type=centre", "type=mixed", "log(b)", "ab"].iter().map(|s| (*s).to_owned()).collect();
    let kinds = classify_terms(&spec, &terms);
    assert_eq!(
        kinds,
        vec![
            TermKind::Numeric { column: "a".into(), transform: None },
            TermKind::Level { column: "type".into(), level: "centre".into(), reference: None },
            TermKind::Level { column: "type".into(), level: "mixed".into(), reference: None },
            TermKind::Numeric { column: "b".into(), transform: Some(TransformSpec::Log) },
            TermKind::Numeric { column: "ab".into(), transform: None },
        ]
    );
    // Terms that do not line up with the spec are kept, described by their label only.
    let odd: Vec<String> = ["zzz", "a", "extra"].iter().map(|s| (*s).to_owned()).collect();
    let kinds = classify_terms(&ModelSpec::new("rate", ["a"]), &odd);
    assert_eq!(
        kinds,
        vec![TermKind::Other("zzz".into()), TermKind::Other("a".into()), TermKind::Other("extra".into())]
    );
}

fn glossary() -> Glossary {
    Glossary::new("districts")
        .with_column("rate", ColumnInfo::new("Assault rate", Some("incidents per 10,000 residents")))
        .with_column("share", ColumnInfo::new("Residents aged 15–24", Some("% of residents")))
        .with_column("income", ColumnInfo::new("Median household income", Some("$")).with_step(1000.0))
        .with_column(
            "marks",
            ColumnInfo::new("Median household income", Some("marks per household")).with_step(1000.0),
        )
        .with_column(
            "outlets",
            ColumnInfo::new("Licensed alcohol outlets", Some("outlets per 1,000 residents")),
        )
        .with_column("vacancy", ColumnInfo::new("Vacant dwellings", Some("% of dwellings")))
        .with_column("type", ColumnInfo::new("District type", None))
        .with_column("pct_rate", ColumnInfo::new("Clearance rate", Some("%")))
        .with_column("spend", ColumnInfo::new("Spending", Some("$")))
        .with_column("hiv", ColumnInfo::new("HIV testing rate", Some("%")))
}

/// One sentence case: the term, the estimate and interval, the response and its transform.
struct Case {
    kind: TermKind,
    estimate: (f64, f64, f64),
    response: &'static str,
    response_transform: Option<TransformSpec>,
    expected: &'static str,
}

fn check(case: Case) {
    let g = glossary();
    let wording = Wording {
        glossary: &g,
        response: case.response,
        response_transform: case.response_transform,
        level: 0.95,
    };
    let (value, low, high) = case.estimate;
    let sentence = comparison_sentence(&case.kind, Estimate { value, low, high }, &wording);
    assert_eq!(sentence, case.expected);
}

fn numeric(column: &str) -> TermKind {
    TermKind::Numeric { column: column.into(), transform: None }
}

#[test]
fn coefficients_become_comparisons_between_areas() {
    let cases = [
        Case {
            kind: numeric("share"),
            estimate: (3.2, 1.1, 5.3),
            response: "rate",
            response_transform: None,
            expected: "Districts one percentage point higher in residents aged 15–24, with the other \
                       indicators equal, have on average 3.2 more incidents per 10,000 residents (95% \
                       interval 1.1 to 5.3 more).",
        },
        Case {
            kind: numeric("income"),
            estimate: (-0.0021, -0.0038, -0.0004),
            response: "rate",
            response_transform: None,
            expected: "Districts $1,000 higher in median household income, with the other indicators \
                       equal, have on average 2.1 fewer incidents per 10,000 residents (95% interval 0.4 \
                       to 3.8 fewer).",
        },
        Case {
            kind: numeric("marks"),
            estimate: (-0.0021, -0.0038, -0.0004),
            response: "rate",
            response_transform: None,
            expected: "Districts 1,000 marks per household higher in median household income, with the \
                       other indicators equal, have on average 2.1 fewer incidents per 10,000 residents \
                       (95% interval 0.4 to 3.8 fewer).",
        },
        Case {
            kind: numeric("outlets"),
            estimate: (1.2, -0.5, 2.9),
            response: "rate",
            response_transform: None,
            expected: "Districts one outlet per 1,000 residents higher in licensed alcohol outlets, with \
                       the other indicators equal, have on average 1.2 more incidents per 10,000 residents \
                       (95% interval from 0.5 fewer to 2.9 more). The data are also consistent with no \
                       difference at all.",
        },
        Case {
            kind: TermKind::Numeric { column: "vacancy".into(), transform: Some(TransformSpec::Log) },
            estimate: (10.0, 5.0, 15.0),
            response: "rate",
            response_transform: None,
            // 10·ln 2 = 6.93, 5·ln 2 = 3.47, 15·ln 2 = 10.4.
            expected: "Districts with twice the level of vacant dwellings, with the other indicators \
                       equal, have on average 6.93 more incidents per 10,000 residents (95% interval 3.47 \
                       to 10.4 more).",
        },
        Case {
            kind: TermKind::Level {
                column: "type".into(),
                level: "centre".into(),
                reference: Some("residential".into()),
            },
            estimate: (-3.5, -6.5, -0.5),
            response: "rate",
            response_transform: None,
            expected: "Districts in the \u{201c}centre\u{201d} group of district type, compared with those \
                       in the \u{201c}residential\u{201d} group and with the other indicators equal, have on \
                       average 3.5 fewer incidents per 10,000 residents (95% interval 0.5 to 6.5 fewer).",
        },
        Case {
            kind: TermKind::Level { column: "type".into(), level: "mixed".into(), reference: None },
            estimate: (1.0, 0.5, 1.5),
            response: "rate",
            response_transform: None,
            expected: "Districts in the \u{201c}mixed\u{201d} group of district type, compared with those in \
                       the reference group and with the other indicators equal, have on average 1 more \
                       incidents per 10,000 residents (95% interval 0.5 to 1.5 more).",
        },
        Case {
            kind: numeric("share"),
            estimate: (0.8, 0.2, 1.4),
            response: "pct_rate",
            response_transform: None,
            expected: "Districts one percentage point higher in residents aged 15–24, with the other \
                       indicators equal, have on average a clearance rate 0.8 percentage points higher \
                       (95% interval 0.2 to 1.4 percentage points higher).",
        },
        Case {
            kind: numeric("share"),
            estimate: (-40.0, -60.0, -20.0),
            response: "spend",
            response_transform: None,
            expected: "Districts one percentage point higher in residents aged 15–24, with the other \
                       indicators equal, have on average a spending $40 lower (95% interval $20 to $60 \
                       lower).",
        },
        Case {
            kind: numeric("hiv"),
            estimate: (0.5, 0.25, 0.75),
            response: "rate",
            response_transform: None,
            expected: "Districts one percentage point higher in HIV testing rate, with the other \
                       indicators equal, have on average 0.5 more incidents per 10,000 residents (95% \
                       interval 0.25 to 0.75 more).",
        },
        Case {
            kind: numeric("share"),
            // e^0.1 − 1 = 10.5%, e^0.05 − 1 = 5.13%, e^0.15 − 1 = 16.2%.
            estimate: (0.1, 0.05, 0.15),
            response: "rate",
            response_transform: Some(TransformSpec::Log),
            expected: "Districts one percentage point higher in residents aged 15–24, with the other \
                       indicators equal, have a typical assault rate about 10.5% higher (95% interval \
                       5.13% to 16.2% higher).",
        },
        Case {
            kind: numeric("share"),
            // e^−0.1 − 1 = −9.52%, e^−0.2 − 1 = −18.1%, e^0.05 − 1 = 5.13%.
            estimate: (-0.1, -0.2, 0.05),
            response: "rate",
            response_transform: Some(TransformSpec::Log),
            expected: "Districts one percentage point higher in residents aged 15–24, with the other \
                       indicators equal, have a typical assault rate about 9.52% lower (95% interval from \
                       18.1% lower to 5.13% higher). The data are also consistent with no difference at \
                       all.",
        },
        Case {
            kind: TermKind::Numeric { column: "share".into(), transform: Some(TransformSpec::Sqrt) },
            estimate: (2.0, 1.0, 3.0),
            response: "rate",
            response_transform: Some(TransformSpec::Sqrt),
            expected: "Districts one unit higher in the square root of residents aged 15–24 (how large a \
                       difference in residents aged 15–24 that is depends on where it starts), with the \
                       other indicators equal, have on average a square root of assault rate 2 higher \
                       (95% interval 1 to 3 higher).",
        },
        Case {
            kind: TermKind::Other("mystery".into()),
            estimate: (1.0, 0.5, 1.5),
            response: "unknown_response",
            response_transform: None,
            expected: "Districts one unit higher in mystery, with the other indicators equal, have on \
                       average a unknown_response 1 higher (95% interval 0.5 to 1.5 higher).",
        },
    ];
    for case in cases {
        check(case);
    }
}

#[test]
fn comparison_steps_follow_the_spread_of_the_data() {
    use wardcast::web::state::round_step;
    // (values, expected step): the power of ten at or below the sample standard deviation.
    let cases: [(&[f64], Option<f64>); 6] = [
        (&[1.0, 2.0, 3.0, 4.0, 5.0], Some(1.0)),                     // sd 1.58
        (&[21_000.0, 30_000.0, 38_000.0, 45_000.0], Some(10_000.0)), // sd 10,300
        (&[21_000.0, 24_000.0, 27_000.0, 30_000.0], Some(1_000.0)),  // sd 3,870
        (&[0.11, 0.12, 0.16, 0.18], Some(0.01)),                     // sd 0.033
        (&[5.0, 5.0, 5.0], None),
        (&[5.0], None),
    ];
    for (xs, expected) in cases {
        assert_eq!(round_step(xs), expected, "{xs:?}");
    }
}

#[test]
fn a_glossary_reads_labels_and_units_from_column_metadata() {
    use wardcast_contract::dataset::{ColumnMeta, ColumnRole};
    let mut unemployment = ColumnMeta::new("unemployment_pct", ColumnRole::Indicator);
    unemployment.label = Some("Unemployment".into());
    unemployment.unit = Some("% of labour force".into());
    let mut code = ColumnMeta::new("district_code", ColumnRole::Key);
    code.unit = Some(" ".into());
    let g = Glossary::from_meta("districts", &[unemployment, code]);
    assert_eq!(g.areas(), "districts");
    assert_eq!(g.column("unemployment_pct"), ColumnInfo::new("Unemployment", Some("% of labour force")));
    assert_eq!(g.column("district_code"), ColumnInfo::new("district_code", None));
    assert_eq!(g.column("not_described"), ColumnInfo::new("not_described", None));
}

#[test]
fn transforms_and_area_nouns_in_words() {
    use wardcast::web::words::transform_phrase;
    use wardcast_contract::spec::TransformSpec;
    for (t, words) in [
        (TransformSpec::Log, "the natural logarithm"),
        (TransformSpec::Power { lambda: 0.0 }, "the natural logarithm"),
        (TransformSpec::Sqrt, "the square root"),
        (TransformSpec::Reciprocal, "the reciprocal"),
        (TransformSpec::Square, "the square"),
        (TransformSpec::Power { lambda: 0.5 }, "the power 0.5"),
    ] {
        assert_eq!(transform_phrase(t), words);
    }
    assert_eq!(wardcast::web::Glossary::new("districts").area(), "district");
    assert_eq!(wardcast::web::Glossary::new("tracts").area(), "tract");
    assert_eq!(wardcast::web::Glossary::default().area(), "area");
}

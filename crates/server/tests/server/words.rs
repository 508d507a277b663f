//! Wording: number formatting, matching terms to the spec, and comparison sentences.

use wardcast::web::words::{
    Estimate, TermKind, Wording, classify_terms, comparison_sentence, fmt_level, fmt_p, fmt_plain,
    fmt_sig,
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
    let plain = [
        (1.0, "1"),
        (0.5, "0.5"),
        (1000.0, "1,000"),
        (2.25, "2.25"),
        (0.1, "0.1"),
    ];
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

fn predictor(
    column: &str,
    transform: Option<TransformSpec>,
    reference: Option<&str>,
) -> PredictorSpec {
    PredictorSpec {
        column: column.into(),
        transform,
        reference_level: reference.map(str::to_owned),
    }
}

#[test]
fn terms_are_matched_to_the_spec_in_order() {
    let mut spec = ModelSpec::new("rate", ["a"]);
    spec.predictors.push(predictor("type", None, None));
    spec.predictors
        .push(predictor("b", Some(TransformSpec::Log), None));
    spec.predictors.push(predictor("ab", None, None));
    let terms: Vec<String> = ["a", "type=centre", "type=mixed", "log(b)", "ab"]
        .iter()
        .map(|s| (*s).to_owned())
        .collect();
    let kinds = classify_terms(&spec, &terms);
    assert_eq!(
        kinds,
        vec![
            TermKind::Numeric {
                column: "a".into(),
                transform: None
            },
            TermKind::Level {
                column: "type".into(),
                level: "centre".into(),
                reference: None
            },
            TermKind::Level {
                column: "type".into(),
                level: "mixed".into(),
                reference: None
            },
            TermKind::Numeric {
                column: "b".into(),
                transform: Some(TransformSpec::Log)
            },
            TermKind::Numeric {
                column: "ab".into(),
                transform: None
            },
        ]
    );
    // Terms that do not line up with the spec are kept, described by their label only.
    let odd: Vec<String> = ["zzz", "a", "extra"]
        .iter()
        .map(|s| (*s).to_owned())
        .collect();
    let kinds = classify_terms(&ModelSpec::new("rate", ["a"]), &odd);
    assert_eq!(
        kinds,
        vec![
            TermKind::Other("zzz".into()),
            TermKind::Other("a".into()),
            TermKind::Other("extra".into())
        ]
    );
}

fn glossary() -> Glossary {
    Glossary::new("districts")
        .with_column(
            "rate",
            ColumnInfo::new(
                "assault rate",
                Some("assault incidents per 10,000 residents"),
            ),
        )
        .with_column("share", ColumnInfo::new("youth share", Some("%")))
        .with_column(
            "income",
            ColumnInfo::new("median household income", Some("$")).with_step(1000.0),
        )
        .with_column(
            "outlets",
            ColumnInfo::new(
                "alcohol outlet density",
                Some("outlets per 1,000 residents"),
            ),
        )
        .with_column("vacancy", ColumnInfo::new("housing vacancy", Some("%")))
        .with_column("type", ColumnInfo::new("the district type", None))
        .with_column("pct_rate", ColumnInfo::new("clearance rate", Some("%")))
        .with_column("spend", ColumnInfo::new("spending", Some("$")))
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
    TermKind::Numeric {
        column: column.into(),
        transform: None,
    }
}

#[test]
fn coefficients_become_comparisons_between_areas() {
    let cases = [
        Case {
            kind: numeric("share"),
            estimate: (3.2, 1.1, 5.3),
            response: "rate",
            response_transform: None,
            expected: "Districts where youth share is one percentage point higher, with the other indicators equal, \
                       have on average 3.2 more assault incidents per 10,000 residents (95% interval 1.1 to 5.3 more).",
        },
        Case {
            kind: numeric("income"),
            estimate: (-0.0021, -0.0038, -0.0004),
            response: "rate",
            response_transform: None,
            expected: "Districts where median household income is $1,000 higher, with the other indicators equal, \
                       have on average 2.1 fewer assault incidents per 10,000 residents (95% interval 0.4 to 3.8 fewer).",
        },
        Case {
            kind: numeric("outlets"),
            estimate: (1.2, -0.5, 2.9),
            response: "rate",
            response_transform: None,
            expected: "Districts where alcohol outlet density is 1 (measured in outlets per 1,000 residents) higher, \
                       with the other indicators equal, have on average 1.2 more assault incidents per 10,000 residents \
                       (95% interval from 0.5 fewer to 2.9 more). The data are also consistent with no difference at all.",
        },
        Case {
            kind: TermKind::Numeric {
                column: "vacancy".into(),
                transform: Some(TransformSpec::Log),
            },
            estimate: (10.0, 5.0, 15.0),
            response: "rate",
            response_transform: None,
            // 10·ln 2 = 6.93, 5·ln 2 = 3.47, 15·ln 2 = 10.4.
            expected: "Districts where housing vacancy is twice as high, with the other indicators equal, \
                       have on average 6.93 more assault incidents per 10,000 residents (95% interval 3.47 to 10.4 more).",
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
            expected: "Districts where the district type is \u{201c}centre\u{201d}, compared with those where it is \
                       \u{201c}residential\u{201d} and with the other indicators equal, have on average 3.5 fewer assault \
                       incidents per 10,000 residents (95% interval 0.5 to 6.5 fewer).",
        },
        Case {
            kind: TermKind::Level {
                column: "type".into(),
                level: "mixed".into(),
                reference: None,
            },
            estimate: (1.0, 0.5, 1.5),
            response: "rate",
            response_transform: None,
            expected: "Districts where the district type is \u{201c}mixed\u{201d}, compared with the reference group and \
                       with the other indicators equal, have on average 1 more assault incidents per 10,000 residents \
                       (95% interval 0.5 to 1.5 more).",
        },
        Case {
            kind: numeric("share"),
            estimate: (0.8, 0.2, 1.4),
            response: "pct_rate",
            response_transform: None,
            expected: "Districts where youth share is one percentage point higher, with the other indicators equal, \
                       have on average a clearance rate 0.8 percentage points higher (95% interval 0.2 to 1.4 \
                       percentage points higher).",
        },
        Case {
            kind: numeric("share"),
            estimate: (-40.0, -60.0, -20.0),
            response: "spend",
            response_transform: None,
            expected: "Districts where youth share is one percentage point higher, with the other indicators equal, \
                       have on average a spending $40 lower (95% interval $20 to $60 lower).",
        },
        Case {
            kind: numeric("share"),
            // e^0.1 − 1 = 10.5%, e^0.05 − 1 = 5.13%, e^0.15 − 1 = 16.2%.
            estimate: (0.1, 0.05, 0.15),
            response: "rate",
            response_transform: Some(TransformSpec::Log),
            expected: "Districts where youth share is one percentage point higher, with the other indicators equal, \
                       have a typical assault rate about 10.5% higher (95% interval 5.13% to 16.2% higher).",
        },
        Case {
            kind: numeric("share"),
            // e^−0.1 − 1 = −9.52%, e^−0.2 − 1 = −18.1%, e^0.05 − 1 = 5.13%.
            estimate: (-0.1, -0.2, 0.05),
            response: "rate",
            response_transform: Some(TransformSpec::Log),
            expected: "Districts where youth share is one percentage point higher, with the other indicators equal, \
                       have a typical assault rate about 9.52% lower (95% interval from 18.1% lower to 5.13% higher). \
                       The data are also consistent with no difference at all.",
        },
        Case {
            kind: TermKind::Numeric {
                column: "share".into(),
                transform: Some(TransformSpec::Sqrt),
            },
            estimate: (2.0, 1.0, 3.0),
            response: "rate",
            response_transform: Some(TransformSpec::Sqrt),
            expected: "Districts where the square root of youth share is one unit higher (how large a difference in \
                       youth share that is depends on its starting value), with the other indicators equal, have on \
                       average a square root of assault rate 2 higher (95% interval 1 to 3 higher).",
        },
        Case {
            kind: TermKind::Other("mystery".into()),
            estimate: (1.0, 0.5, 1.5),
            response: "unknown_response",
            response_transform: None,
            expected: "Districts one unit higher in mystery, with the other indicators equal, have on average a \
                       unknown_response 1 higher (95% interval 0.5 to 1.5 higher).",
        },
    ];
    for case in cases {
        check(case);
    }
}

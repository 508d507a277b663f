//! The validation report: inferred types and roles, statistics, problems with row numbers,
//! and the analyst's choices (type overrides, dropped rows, text read as missing).

use std::collections::BTreeSet;

use wardcast_contract::dataset::{
    ColumnRole, ColumnSummary, ColumnType, ImportReport, Problem, ProblemCell, ProblemKind,
};
use wardcast_store::{Draft, ImportOptions, RowDrop, import_bytes};

use crate::common::{decimals, import, texts};

fn column<'a>(report: &'a ImportReport, name: &str) -> &'a ColumnSummary {
    report.columns.iter().find(|c| c.column == name).unwrap_or_else(|| panic!("no column {name}"))
}

fn problem(report: &ImportReport, kind: ProblemKind, col: &str) -> Problem {
    report
        .problems
        .iter()
        .find(|p| p.kind == kind && p.column == col)
        .cloned()
        .unwrap_or_else(|| panic!("no {kind:?} problem for {col}: {:?}", report.problems))
}

fn cells(list: &[(usize, &str)]) -> Vec<ProblemCell> {
    list.iter().map(|&(row, v)| ProblemCell { row, value: v.to_owned() }).collect()
}

/// Expected summary of one column: (name, type, role, count, missing, min, max, mean, median).
type Expected<'a> =
    (&'a str, ColumnType, ColumnRole, usize, usize, Option<f64>, Option<f64>, Option<f64>, Option<f64>);

fn check_columns(report: &ImportReport, expected: &[Expected<'_>]) {
    for &(name, ty, role, count, missing, min, max, mean, median) in expected {
        let c = column(report, name);
        assert_eq!((c.column_type, c.role, c.count, c.missing), (ty, role, count, missing), "{name}");
        assert_eq!((c.min, c.max, c.median), (min, max, median), "{name}");
        match (c.mean, mean) {
            (Some(a), Some(b)) => {
                assert!((a - b).abs() <= 1e-9 * b.abs().max(1.0), "{name}: mean {a} vs {b}")
            }
            (a, b) => assert_eq!(a, b, "{name}"),
        }
    }
}

#[test]
fn types_roles_and_statistics_are_inferred() {
    let staged = import("types.csv", &ImportOptions::default());
    let r = staged.report();
    assert_eq!(r.key.as_deref(), Some("district_code"));
    assert_eq!(r.rows, 3);
    // Hand-computed: incidents 5, 7, 0; median_income 52100.5, 21500, 53400.25.
    check_columns(
        r,
        &[
            ("district_code", ColumnType::Text, ColumnRole::Key, 3, 0, None, None, None, None),
            ("zone_code", ColumnType::Text, ColumnRole::Group, 3, 0, None, None, None, None),
            (
                "incidents",
                ColumnType::Integer,
                ColumnRole::Count,
                3,
                0,
                Some(0.0),
                Some(7.0),
                Some(4.0),
                Some(5.0),
            ),
            (
                "median_income",
                ColumnType::Decimal,
                ColumnRole::Indicator,
                3,
                0,
                Some(21500.0),
                Some(53400.25),
                Some((52100.5 + 21500.0 + 53400.25) / 3.0),
                Some(52100.5),
            ),
            ("district_type", ColumnType::Text, ColumnRole::Group, 3, 0, None, None, None, None),
            (
                "constant",
                ColumnType::Integer,
                ColumnRole::Indicator,
                3,
                0,
                Some(1.0),
                Some(1.0),
                Some(1.0),
                Some(1.0),
            ),
            ("empty", ColumnType::Text, ColumnRole::Group, 0, 3, None, None, None, None),
        ],
    );
    assert_eq!(column(r, "zone_code").type_note, "whole numbers with leading zeros, kept as text codes");
    assert_eq!(column(r, "district_type").distinct, Some(2));
    assert_eq!(texts(staged.frame(), "zone_code")[0].as_deref(), Some("007"));
    let constant = problem(r, ProblemKind::ConstantColumn, "constant");
    assert_eq!(constant.message, "column \"constant\" holds the same value (1) on every row that has one");
    assert!(!constant.blocks_saving);
    assert_eq!(problem(r, ProblemKind::EmptyColumn, "empty").message, "column \"empty\" has no values");
    assert!(r.can_save);
}

#[test]
fn text_in_numeric_columns_blocks_saving_until_resolved() {
    let staged = import("text_in_numeric.csv", &ImportOptions::default());
    let r = staged.report();
    let c = column(r, "unemployment_pct");
    assert_eq!(c.column_type, ColumnType::Decimal);
    assert_eq!(c.type_note, "4 of 6 values are numbers; the other 2 are listed as problems");
    let p = problem(r, ProblemKind::TextInNumeric, "unemployment_pct");
    assert_eq!(p.message, "column \"unemployment_pct\" has 2 cells that are not numbers");
    assert_eq!(p.total, 2);
    assert_eq!(p.examples, cells(&[(3, "n/a"), (5, "12%")]));
    assert!(p.blocks_saving && !r.can_save);
    assert_eq!(
        Draft::from_import(&staged).err().map(|e| e.to_string()).as_deref(),
        Some("the table was not saved: column \"unemployment_pct\" has 2 cells that are not numbers")
    );

    // Choice 1: read such cells as missing, explicitly.
    let missing = import(
        "text_in_numeric.csv",
        &ImportOptions {
            text_as_missing: BTreeSet::from(["unemployment_pct".to_owned()]),
            ..ImportOptions::default()
        },
    );
    assert!(missing.can_save());
    assert_eq!(column(missing.report(), "unemployment_pct").missing, 2);
    assert_eq!(
        decimals(missing.frame(), "unemployment_pct"),
        vec![Some(5.5), None, Some(7.1), None, Some(6.0), Some(4.4)]
    );

    // Choice 2: keep the column as text.
    let as_text = import(
        "text_in_numeric.csv",
        &ImportOptions {
            types: [("unemployment_pct".to_owned(), ColumnType::Text)].into(),
            ..ImportOptions::default()
        },
    );
    assert!(as_text.can_save());
    let c = column(as_text.report(), "unemployment_pct");
    assert_eq!((c.column_type, c.inferred_type), (ColumnType::Text, ColumnType::Decimal));
    assert_eq!(c.type_note, "text (chosen; the values suggested decimal)");

    // Choice 3: drop the rows, each with a reason that is recorded.
    let dropped = import(
        "text_in_numeric.csv",
        &ImportOptions {
            drop_rows: vec![
                RowDrop { row: 3, reason: "unemployment not published".into() },
                RowDrop { row: 5, reason: "percent sign typo; to be corrected at source".into() },
            ],
            ..ImportOptions::default()
        },
    );
    assert!(dropped.can_save());
    assert_eq!(dropped.report().rows, 4);
    let d = &dropped.report().dropped_rows;
    assert_eq!((d[0].row, d[0].key.as_str(), d[0].reason.as_str()), (3, "D2", "unemployment not published"));
    assert_eq!((d[1].row, d[1].key.as_str()), (5, "D4"));
    assert_eq!(
        texts(dropped.frame(), "district_code"),
        vec![Some("D1".into()), Some("D3".into()), Some("D5".into()), Some("D6".into())]
    );
}

#[test]
fn duplicate_and_blank_keys_are_listed_with_rows() {
    let staged = import("duplicate_keys.csv", &ImportOptions::default());
    let r = staged.report();
    assert_eq!(r.key.as_deref(), Some("district_code"));
    assert_eq!(
        r.key_note,
        "\"district_code\" was taken as the key because of its name; choose another if that is wrong"
    );
    let dup = problem(r, ProblemKind::DuplicateKey, "district_code");
    assert_eq!(dup.message, "2 keys appear in column \"district_code\" on more than one row (5 rows)");
    assert_eq!(dup.examples, cells(&[(2, "D1"), (3, "D2"), (4, "D1"), (7, "D2"), (8, "D2")]));
    let blank = problem(r, ProblemKind::BlankKey, "district_code");
    assert_eq!(blank.message, "1 row has no key in column \"district_code\"");
    assert_eq!(blank.examples, cells(&[(6, "")]));
    assert!(!r.can_save);
    assert_eq!(
        staged.blocking_reasons(),
        vec![
            "2 keys appear in column \"district_code\" on more than one row (5 rows)".to_owned(),
            "1 row has no key in column \"district_code\"".to_owned(),
        ]
    );
    let fixed = import(
        "duplicate_keys.csv",
        &ImportOptions {
            drop_rows: [4, 6, 7, 8]
                .iter()
                .map(|&row| RowDrop { row, reason: "repeat of an earlier row".into() })
                .collect(),
            ..ImportOptions::default()
        },
    );
    assert!(fixed.can_save());
    assert_eq!(fixed.report().rows, 4);
}

#[test]
fn negative_counts_and_populations_are_problems() {
    let staged = import("negative_counts.csv", &ImportOptions::default());
    let r = staged.report();
    assert_eq!(column(r, "assaults").role, ColumnRole::Count);
    assert_eq!(column(r, "residents").role, ColumnRole::Population);
    let a = problem(r, ProblemKind::NegativeCount, "assaults");
    assert_eq!(a.message, "column \"assaults\" is a count but has 1 negative value");
    assert_eq!(a.examples, cells(&[(3, "-3")]));
    let p = problem(r, ProblemKind::NegativeCount, "residents");
    assert_eq!(p.examples, cells(&[(4, "-1500")]));
    assert!(!r.problems.iter().any(|p| p.column == "change_pct"), "indicators may be negative");
    assert!(!r.can_save);
    // Declaring the column something else removes the check.
    let relabelled = import(
        "negative_counts.csv",
        &ImportOptions {
            roles: [
                ("residents".to_owned(), ColumnRole::Indicator),
                ("assaults".to_owned(), ColumnRole::Indicator),
            ]
            .into(),
            ..ImportOptions::default()
        },
    );
    assert!(relabelled.can_save());
    assert_eq!(column(relabelled.report(), "residents").role_note, "chosen");
}

#[test]
fn blank_lines_keep_their_row_numbers() {
    let staged = import("blank_middle.csv", &ImportOptions::default());
    let r = staged.report();
    assert_eq!(r.rows, 4);
    assert_eq!(problem(r, ProblemKind::TextInNumeric, "value").examples, cells(&[(4, "x")]));
    assert_eq!(
        r.notes,
        vec!["3 blank lines were skipped; blank lines keep their place in the row numbering".to_owned()]
    );
}

#[test]
fn key_is_detected_or_chosen() {
    let plain = ImportOptions::default();
    // No key-like name: the first column with a value on every row.
    let s = import_bytes(b"name,share_pct\nNorth,1.5\nSouth,2.5\n", "a.csv", &plain).expect("import");
    assert_eq!(s.key(), Some("name"));
    // Chosen explicitly, even when numeric-looking: kept exactly as text.
    let s = import_bytes(
        b"area_no,share_pct\n007,1.5\n8,2.5\n",
        "b.csv",
        &ImportOptions { key: Some("area_no".into()), ..plain.clone() },
    )
    .expect("import");
    assert_eq!(texts(s.frame(), "area_no"), vec![Some("007".into()), Some("8".into())]);
    assert_eq!(s.report().columns[0].role, ColumnRole::Key);
    // Only text may be a group: a role override on a text column is refused.
    let e = import_bytes(
        b"code,district_type\nA,mixed\nB,centre\n",
        "c.csv",
        &ImportOptions { roles: [("district_type".to_owned(), ColumnRole::Count)].into(), ..plain.clone() },
    )
    .err()
    .map(|e| e.to_string());
    assert_eq!(
        e.as_deref(),
        Some("column \"district_type\" holds text, so it can only be a group; it cannot be a count")
    );
    // No complete column: no key, and saving is blocked until one is chosen.
    let s = import_bytes(b"x,y\n1.5,\n,2.5\n", "d.csv", &plain).expect("import");
    assert_eq!(s.key(), None);
    assert!(!s.can_save());
    assert_eq!(s.blocking_reasons(), vec!["no key column was found; choose one".to_owned()]);
}

#[test]
fn report_round_trips_as_json() {
    let staged = import("duplicate_keys.csv", &ImportOptions::default());
    let json = serde_json::to_string(staged.report()).expect("serialise");
    let back: ImportReport = serde_json::from_str(&json).expect("parse");
    assert_eq!(&back, staged.report());
    assert!(json.contains("\"schema_version\":\"wardcast.v1\""));
}

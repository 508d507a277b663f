//! Joins on the key (the demo's two tables), derived columns, metadata, exclusions and the
//! conversion into the engine's table.

use std::collections::HashMap;

use wardcast_contract::dataset::{
    ColumnMeta, ColumnRole, Derivation, DerivedColumn, Exclusion, JoinKind, Origin,
};
use wardcast_engine::ColumnData;
use wardcast_store::{Draft, ImportOptions, Store, import_bytes, import_file, join};

use crate::common::{decimals, demo, temp_store, texts};

/// Reads a demo CSV with a plain split (the demo files hold no quoted fields), for
/// independent expected values.
fn demo_rows(name: &str) -> Vec<HashMap<String, String>> {
    let text = std::fs::read_to_string(demo(name)).expect("demo file");
    let mut lines = text.lines();
    let header: Vec<String> = lines.next().expect("header").split(',').map(str::to_owned).collect();
    lines
        .filter(|l| !l.is_empty())
        .map(|l| header.iter().cloned().zip(l.split(',').map(str::to_owned)).collect())
        .collect()
}

fn save_demo(store: &mut Store) {
    for (name, file) in [("districts", "larkmoor_districts.csv"), ("budgets", "larkmoor_budgets.csv")] {
        let staged = import_file(&demo(file), &ImportOptions::default()).expect("demo import");
        assert!(staged.can_save(), "{file}: {:?}", staged.blocking_reasons());
        store.save_import(name, &staged).expect("save");
    }
}

#[test]
fn demo_join_reports_the_two_unmatched_budget_codes() {
    let (_dir, mut store) = temp_store();
    save_demo(&mut store);
    let left = store.join("districts", "budgets", JoinKind::Left).expect("join");
    let r = &left.report;
    // The demo README: LK-7A (a typo of LK-07) and LK-65 have no district; LK-07 and LK-58
    // have no budget row; 62 of 64 districts join.
    assert_eq!(r.unmatched_right, vec!["LK-7A".to_owned(), "LK-65".to_owned()]);
    assert_eq!(r.unmatched_left, vec!["LK-07".to_owned(), "LK-58".to_owned()]);
    assert_eq!((r.matched, r.rows), (62, 64));
    assert!(r.duplicates_left.is_empty() && r.duplicates_right.is_empty());
    assert_eq!((r.left.as_str(), r.right.as_str()), ("districts@1", "budgets@1"));
    let draft = left.draft.expect("joined table");
    let budgets = draft.frame().column("programme_budget").expect("budget column");
    assert_eq!(budgets.null_count(), 2);
    let inner = store.join("districts", "budgets", JoinKind::Inner).expect("join");
    assert_eq!(inner.report.rows, 62);
    assert_eq!(inner.draft.expect("inner").frame().height(), 62);
}

#[test]
fn duplicate_keys_make_a_join_report_without_a_table() {
    let left = import_bytes(b"code,x\nA,1\nB,2\nC,3\n", "left.csv", &ImportOptions::default()).expect("left");
    let right =
        import_bytes(b"code,x\nA,5\nA,6\nD,7\n", "right.csv", &ImportOptions::default()).expect("right");
    let joined = join(&left, &right, JoinKind::Left).expect("report");
    assert!(joined.draft.is_none());
    assert_eq!(joined.report.duplicates_right, vec!["A".to_owned()]);
    assert_eq!(joined.report.unmatched_left, vec!["B".to_owned(), "C".to_owned()]);
    assert_eq!(joined.report.unmatched_right, vec!["D".to_owned()]);
    assert_eq!(joined.report.renamed, vec![("x".to_owned(), "x_right_csv".to_owned())]);
}

#[test]
fn derived_rate_is_recomputed_on_every_new_version() {
    let (_dir, mut store) = temp_store();
    save_demo(&mut store);
    let districts = store.load("districts").expect("load");
    let mut draft = districts.draft();
    let spec = DerivedColumn {
        name: "assault_rate_per_10k".into(),
        derivation: Derivation::RatePer {
            count: "assaults".into(),
            population: "residents".into(),
            per: 10_000.0,
        },
        meta: None,
    };
    let summary = draft.add_derived(spec).expect("derive");
    assert_eq!((summary.computed, summary.missing_inputs, summary.zero_denominators), (64, 0, 0));
    draft.describe_change("added the assault rate");
    let v2 = store.save("districts", draft).expect("save");
    assert_eq!(v2.version_id, "districts@2");
    assert_eq!(v2.column("assault_rate_per_10k").map(|c| c.meta.role), Some(ColumnRole::Rate));
    let rows = demo_rows("larkmoor_districts.csv");
    let expected: Vec<Option<f64>> = rows
        .iter()
        .map(|r| {
            let a: f64 = r["assaults"].parse().expect("count");
            let p: f64 = r["residents"].parse().expect("population");
            Some(a / p * 10_000.0)
        })
        .collect();
    let loaded = store.load("districts@2").expect("load v2");
    assert_eq!(decimals(loaded.frame(), "assault_rate_per_10k"), expected);

    // A corrected source file arrives as version 3: the rate follows it.
    let text = std::fs::read_to_string(demo("larkmoor_districts.csv")).expect("demo");
    let first = &rows[0];
    let old_line = text.lines().nth(1).expect("first row").to_owned();
    let new_line = old_line.replacen(&format!(",{},", first["assaults"]), ",100,", 1);
    assert_ne!(old_line, new_line);
    let corrected = text.replacen(&old_line, &new_line, 1);
    let staged = import_bytes(corrected.as_bytes(), "larkmoor_districts.csv", &ImportOptions::default())
        .expect("import");
    let v3 = store.save_import("districts", &staged).expect("save v3");
    assert_eq!(v3.version, 3);
    assert_eq!(v3.derived.len(), 1, "the derivation is carried to the new version");
    let residents: f64 = first["residents"].parse().expect("population");
    let loaded = store.load("districts@3").expect("load v3");
    assert_eq!(decimals(loaded.frame(), "assault_rate_per_10k")[0], Some(100.0 / residents * 10_000.0));
}

#[test]
fn derivations_share_difference_ratio_and_missing_inputs() {
    let staged = import_bytes(
        b"code,part,whole,other\nA,5,20,1\nB,3,0,2\nC,,10,4\n",
        "d.csv",
        &ImportOptions::default(),
    )
    .expect("import");
    let mut draft = Draft::from_import(&staged).expect("draft");
    let add = |draft: &mut Draft, name: &str, d: Derivation| {
        draft.add_derived(DerivedColumn { name: name.into(), derivation: d, meta: None }).expect("derive")
    };
    let s = add(&mut draft, "share", Derivation::Share { part: "part".into(), whole: "whole".into() });
    assert_eq!((s.computed, s.missing_inputs, s.zero_denominators), (1, 1, 1));
    add(&mut draft, "diff", Derivation::Difference { left: "whole".into(), right: "other".into() });
    add(&mut draft, "ratio", Derivation::Ratio { numerator: "other".into(), denominator: "whole".into() });
    assert_eq!(decimals(draft.frame(), "share"), vec![Some(25.0), None, None]);
    assert_eq!(decimals(draft.frame(), "diff"), vec![Some(19.0), Some(-2.0), Some(6.0)]);
    assert_eq!(decimals(draft.frame(), "ratio"), vec![Some(0.05), None, Some(0.4)]);
    let err = draft
        .add_derived(DerivedColumn {
            name: "bad".into(),
            derivation: Derivation::Ratio { numerator: "code".into(), denominator: "whole".into() },
            meta: None,
        })
        .err()
        .map(|e| e.to_string());
    assert_eq!(err.as_deref(), Some("cannot derive \"bad\": column \"code\" holds text, not numbers"));
    let err = draft
        .add_derived(DerivedColumn {
            name: "part".into(),
            derivation: Derivation::Difference { left: "whole".into(), right: "other".into() },
            meta: None,
        })
        .err()
        .map(|e| e.to_string());
    assert_eq!(
        err.as_deref(),
        Some("cannot derive \"part\": a column of that name already holds imported values")
    );
}

#[test]
fn metadata_exclusions_and_join_refresh() {
    let (_dir, mut store) = temp_store();
    save_demo(&mut store);
    // Metadata and exclusions make an edited version; the excluded row stays in the table.
    let mut draft = store.load("districts").expect("load").draft();
    draft
        .set_meta(ColumnMeta {
            column: "vacancy_pct".into(),
            label: Some("Vacant dwellings".into()),
            unit: Some("% of dwellings".into()),
            source: Some("Larkmoor Housing Department".into()),
            vintage: Some(2025),
            role: ColumnRole::Indicator,
        })
        .expect("meta");
    let bad =
        draft.set_meta(ColumnMeta::new("district_name", ColumnRole::Count)).err().map(|e| e.to_string());
    assert_eq!(
        bad.as_deref(),
        Some("column \"district_name\" holds text, so it can only be a group; it cannot be a count")
    );
    let no_reason = draft
        .set_exclusions(vec![Exclusion { key: "LK-47".into(), reason: " ".into() }])
        .err()
        .map(|e| e.to_string());
    assert_eq!(no_reason.as_deref(), Some("the exclusion of \"LK-47\" needs a reason"));
    let unknown = draft
        .set_exclusions(vec![Exclusion { key: "LK-99".into(), reason: "x".into() }])
        .err()
        .map(|e| e.to_string());
    assert_eq!(unknown.as_deref(), Some("cannot exclude \"LK-99\": no row has that key"));
    draft
        .set_exclusions(vec![Exclusion { key: "LK-47".into(), reason: "event crowds, not residents".into() }])
        .expect("exclusion");
    let v2 = store.save("districts", draft).expect("save");
    assert_eq!(v2.rows, 64);
    assert_eq!(v2.exclusions[0].reason, "event crowds, not residents");
    assert_eq!(v2.column("vacancy_pct").and_then(|c| c.meta.unit.as_deref()), Some("% of dwellings"));
    assert!(matches!(&v2.origin, Origin::Edit { .. }));

    // A saved join is rebuilt when a source gets a new version.
    let joined = store.join("districts@1", "budgets", JoinKind::Left).expect("join").draft.expect("table");
    let saved = store.save("analysis table", joined).expect("save join");
    assert_eq!(saved.dataset, "analysis-table");
    let refreshed = store.refresh("analysis-table").expect("refresh").expect("a new version");
    assert_eq!(refreshed.version, 2);
    assert!(matches!(&refreshed.origin, Origin::Join { left, .. } if left == "districts@2"));
    assert_eq!(refreshed.exclusions.len(), 1, "exclusions come with the left table");
    assert!(store.refresh("analysis-table").expect("refresh").is_none(), "already up to date");
}

#[test]
fn dataset_converts_to_the_engine_table() {
    let (_dir, mut store) = temp_store();
    save_demo(&mut store);
    let districts = store.load("districts").expect("load");
    let table = districts.to_engine_table().expect("engine table");
    assert_eq!(table.nrows(), 64);
    assert_eq!(table.keys()[0], "LK-01");
    assert!(table.column("district_code").is_none(), "the key becomes the row keys");
    let rows = demo_rows("larkmoor_districts.csv");
    match &table.column("vacancy_pct").expect("vacancy").data {
        ColumnData::Numeric(v) => {
            // Demo README: LK-12 has no vacancy value.
            let i = rows.iter().position(|r| r["district_code"] == "LK-12").expect("LK-12");
            assert_eq!(v[i], None);
            assert_eq!(v[0], rows[0]["vacancy_pct"].parse().ok());
        }
        other => panic!("vacancy is not numeric: {other:?}"),
    }
    match &table.column("district_type").expect("type").data {
        ColumnData::Text(v) => assert_eq!(v[0].as_deref(), Some(rows[0]["district_type"].as_str())),
        other => panic!("district type is not text: {other:?}"),
    }
    assert_eq!(texts(districts.frame(), "district_code").len(), 64);
}

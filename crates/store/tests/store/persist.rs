//! Durability: save/load round trips, start-up verification, stray temp files, quarantine,
//! and saved analyses with export and import.

use std::path::Path;

use serde_json::json;
use wardcast_contract::dataset::{CvSettings, SavedAnalysis};
use wardcast_contract::spec::{ExclusionSpec, ModelSpec};
use wardcast_store::{ImportOptions, Store, import_bytes};

use crate::common::{import, same_frame, temp_store};

fn analysis(dataset_version: &str) -> SavedAnalysis {
    SavedAnalysis {
        schema_version: "wardcast.v1".into(),
        id: String::new(),
        title: "Assault prevention 2026".into(),
        dataset_version: dataset_version.into(),
        question: "Which districts should get the after-school expansion?".into(),
        author: "Budget office".into(),
        model_spec: ModelSpec {
            exclusions: vec![ExclusionSpec { key: "D2".into(), reason: "boundary change mid-year".into() }],
            ..ModelSpec::new("unemployment_pct", ["residents"])
        },
        cv: CvSettings { folds: 5, seeds: vec![20_260_101] },
        scenario: json!({"unemployment_pct": -1.0}),
        allocation: json!({"budget": 250_000}),
        created_unix: 0,
        updated_unix: 0,
    }
}

#[test]
fn save_and_load_round_trip() {
    let (dir, mut store) = temp_store();
    let staged = import("types.csv", &ImportOptions::default());
    let m1 = store.save_import("Test Districts", &staged).expect("save");
    assert_eq!(
        (m1.dataset.as_str(), m1.version, m1.version_id.as_str()),
        ("test-districts", 1, "test-districts@1")
    );
    assert!(m1.checksum.starts_with("sha256:") && m1.checksum.len() == 7 + 64);
    let staged2 = import(
        "duplicate_keys.csv",
        &ImportOptions {
            drop_rows: [4, 6, 7, 8]
                .iter()
                .map(|&row| wardcast_store::RowDrop { row, reason: "repeat".into() })
                .collect(),
            ..ImportOptions::default()
        },
    );
    let m2 = store.save_import("Test Districts", &staged2).expect("save v2");
    assert_eq!(m2.version, 2);
    assert_eq!(m2.dropped_rows.len(), 4);
    drop(store);

    let (store, report) = Store::open(dir.path().join("data")).expect("reopen");
    assert!(report.log.is_empty(), "{:?}", report.log);
    assert_eq!((report.datasets, report.versions), (1, 2));
    let v1 = store.load("test-districts@1").expect("v1");
    assert!(same_frame(v1.frame(), staged.frame()));
    assert_eq!(v1.manifest(), &m1);
    let latest = store.load("Test Districts").expect("by name");
    assert!(same_frame(latest.frame(), staged2.frame()));
    let listing = store.list();
    assert_eq!(listing.len(), 1);
    assert_eq!(listing[0].versions, vec![1, 2]);
    assert_eq!(
        store.load("test-districts@7").err().map(|e| e.to_string()).as_deref(),
        Some("the table \"test-districts\" has no version 7")
    );
    assert_eq!(
        store.load("nothing").err().map(|e| e.to_string()).as_deref(),
        Some("no stored table is called \"nothing\"")
    );
}

#[test]
fn a_refused_import_stores_nothing() {
    let (dir, mut store) = temp_store();
    let staged = import("duplicate_keys.csv", &ImportOptions::default());
    let err = store.save_import("dups", &staged).err().map(|e| e.to_string());
    assert_eq!(
        err.as_deref(),
        Some(
            "the table was not saved: 2 keys appear in column \"district_code\" on more than one row (5 rows); 1 row has no key in column \"district_code\""
        )
    );
    assert!(store.list().is_empty());
    let datasets = dir.path().join("data/datasets");
    assert_eq!(std::fs::read_dir(&datasets).expect("dir").count(), 0);
}

fn files(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .map(|rd| rd.filter_map(|e| e.ok()).map(|e| e.file_name().to_string_lossy().into_owned()).collect())
        .unwrap_or_default();
    v.sort();
    v
}

#[test]
fn start_up_removes_temp_files_and_quarantines_damage() {
    let (dir, mut store) = temp_store();
    let root = dir.path().join("data");
    let staged = import("types.csv", &ImportOptions::default());
    store.save_import("a", &staged).expect("v1");
    store.save_import("a", &staged).expect("v2");
    store.save_import("b", &staged).expect("b1");
    drop(store);
    let a = root.join("datasets/a");
    // A stray temp file, a flipped byte in a@2's data, and an orphaned data file.
    std::fs::write(a.join(".tmp-v000003.arrow.1.0"), b"partial").expect("temp");
    let data = a.join("v000002.arrow");
    let mut bytes = std::fs::read(&data).expect("read");
    let mid = bytes.len() / 2;
    bytes[mid] ^= 0xFF;
    std::fs::write(&data, bytes).expect("damage");
    std::fs::copy(a.join("v000001.arrow"), a.join("v000009.arrow")).expect("orphan");
    std::fs::write(root.join("analyses/broken.json"), b"{ not json").expect("broken analysis");

    let (store, report) = Store::open(&root).expect("reopen");
    assert_eq!(report.removed.len(), 1);
    assert_eq!(report.quarantined.len(), 4, "{:?}", report.log);
    let log = report.log.join("\n");
    assert!(
        log.contains(
            "removed stray temporary file datasets/a/.tmp-v000003.arrow.1.0 (left by an interrupted write)"
        ),
        "{log}"
    );
    assert!(log.contains("quarantined datasets/a/v000002.arrow: its checksum does not match the manifest; moved to quarantine/"), "{log}");
    assert!(log.contains("quarantined datasets/a/v000002.json: its data file was damaged"), "{log}");
    assert!(
        log.contains("quarantined datasets/a/v000009.arrow: no manifest refers to it (a save was interrupted before its manifest was written)"),
        "{log}"
    );
    assert!(log.contains("quarantined analyses/broken.json: the analysis cannot be read"), "{log}");
    // The rest loads.
    assert_eq!(store.versions("a").expect("a").iter().map(|m| m.version).collect::<Vec<_>>(), vec![1]);
    assert!(store.load("b").is_ok());
    assert_eq!(files(&a), vec!["v000001.arrow".to_owned(), "v000001.json".to_owned()]);
    assert_eq!(files(&root.join("quarantine")).len(), 4);
    // The next save takes the next free number after the loaded versions.
    drop(store);
    let (mut store, report) = Store::open(&root).expect("third open");
    assert!(report.log.is_empty(), "{:?}", report.log);
    assert_eq!(store.save_import("a", &staged).expect("v2 again").version, 2);
}

#[test]
fn saved_analyses_persist_export_and_import() {
    let (dir, mut store) = temp_store();
    let staged = import(
        "text_in_numeric.csv",
        &ImportOptions {
            text_as_missing: ["unemployment_pct".to_owned()].into(),
            ..ImportOptions::default()
        },
    );
    store.save_import("districts", &staged).expect("save");
    let saved = store.save_analysis(analysis("districts@1")).expect("save analysis");
    assert_eq!(saved.id.len(), 16);
    assert!(SavedAnalysis::is_valid_id(&saved.id));
    assert!(saved.created_unix > 0);
    // Saving again keeps the id.
    let mut edited = saved.clone();
    edited.question = "Where should the new outreach team go?".into();
    let resaved = store.save_analysis(edited).expect("resave");
    assert_eq!(resaved.id, saved.id);
    assert_eq!(resaved.created_unix, saved.created_unix);

    let export = dir.path().join("exported.wardcast-analysis.json");
    store.export_analysis(&saved.id, &export).expect("export");
    let text = std::fs::read_to_string(&export).expect("read export");
    assert!(text.contains("\"schema_version\": \"wardcast.v1\""));
    drop(store);
    let (mut store, report) = Store::open(dir.path().join("data")).expect("reopen");
    assert_eq!(report.analyses, 1);
    assert_eq!(
        store.analysis(&saved.id).expect("analysis").question,
        "Where should the new outreach team go?"
    );

    // Importing the same file keeps its id; a different analysis under the same id gets a new one.
    let same = store.import_analysis(&export).expect("import same");
    assert_eq!(same.id, saved.id);
    let mut other: serde_json::Value = serde_json::from_str(&text).expect("json");
    other["question"] = json!("A different question");
    std::fs::write(&export, other.to_string()).expect("write");
    let renamed = store.import_analysis(&export).expect("import other");
    assert_ne!(renamed.id, saved.id);
    assert_eq!(store.analyses().count(), 2);

    // Unknown schema versions and invalid settings are refused.
    other["schema_version"] = json!("wardcast.v0");
    std::fs::write(&export, other.to_string()).expect("write");
    assert_eq!(
        store.import_analysis(&export).err().map(|e| e.to_string()).as_deref(),
        Some("this file uses schema wardcast.v0, but this version of wardcast reads wardcast.v1")
    );
    let mut bad = analysis("districts@1");
    bad.cv.folds = 1;
    assert_eq!(
        store.save_analysis(bad).err().map(|e| e.to_string()).as_deref(),
        Some("the analysis cannot be saved: cross-validation needs at least 2 folds and one seed")
    );
    let mut bad = analysis("districts@1");
    bad.model_spec.exclusions[0].reason.clear();
    assert_eq!(
        store.save_analysis(bad).err().map(|e| e.to_string()).as_deref(),
        Some(
            "the analysis cannot be saved: its model spec is invalid (exclusions: the exclusion of \"D2\" needs a reason)"
        )
    );
    let missing = store.save_analysis(analysis("nowhere@1")).err().map(|e| e.to_string());
    assert_eq!(
        missing.as_deref(),
        Some(
            "the analysis cannot be saved: its dataset version \"nowhere@1\" is not stored (no stored table is called \"nowhere\")"
        )
    );
    store.delete_analysis(&renamed.id).expect("delete");
    assert_eq!(store.analyses().count(), 1);
}

#[test]
fn a_table_without_problems_saves_from_memory() {
    let (_dir, mut store) = temp_store();
    let staged =
        import_bytes(b"code;value\nA;1,5\nB;2\n", "eu.csv", &ImportOptions::default()).expect("import");
    let m = store.save_import("eu", &staged).expect("save");
    let loaded = store.load(&m.version_id).expect("load");
    assert!(same_frame(loaded.frame(), staged.frame()));
    assert_eq!(loaded.keys().expect("keys"), vec!["A".to_owned(), "B".to_owned()]);
}

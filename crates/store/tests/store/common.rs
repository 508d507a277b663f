//! Shared helpers: fixture paths, imports and temporary stores.

use std::path::{Path, PathBuf};

use polars::prelude::DataFrame;
use wardcast_store::{ImportOptions, StagedImport, Store, import_file};

/// A fixture under tests/fixtures/import.
pub fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/import").join(name)
}

/// A file of the demo scenario, waiting up to a minute for it to appear.
pub fn demo(name: &str) -> PathBuf {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo").join(name);
    for _ in 0..120 {
        if path.is_file() {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(500));
    }
    path
}

/// Imports a fixture, failing the test on refusal.
pub fn import(name: &str, options: &ImportOptions) -> StagedImport {
    match import_file(&fixture(name), options) {
        Ok(s) => s,
        Err(e) => panic!("{name} was refused: {e}"),
    }
}

/// A fresh store in a temporary folder.
pub fn temp_store() -> (tempfile::TempDir, Store) {
    let dir = tempfile::tempdir().expect("temp dir");
    let (store, report) = Store::open(dir.path().join("data")).expect("open store");
    assert!(report.log.is_empty(), "{:?}", report.log);
    (dir, store)
}

/// The values of a text column.
pub fn texts(frame: &DataFrame, name: &str) -> Vec<Option<String>> {
    let s = frame.column(name).expect("column").as_materialized_series();
    s.str().expect("text column").iter().map(|v| v.map(str::to_owned)).collect()
}

/// The values of a decimal column.
pub fn decimals(frame: &DataFrame, name: &str) -> Vec<Option<f64>> {
    let s = frame.column(name).expect("column").as_materialized_series();
    s.f64().expect("decimal column").iter().collect()
}

/// The values of an integer column.
pub fn integers(frame: &DataFrame, name: &str) -> Vec<Option<i64>> {
    let s = frame.column(name).expect("column").as_materialized_series();
    s.i64().expect("integer column").iter().collect()
}

/// Whether two frames hold the same columns and values (missing cells equal).
pub fn same_frame(a: &DataFrame, b: &DataFrame) -> bool {
    a.equals_missing(b)
}

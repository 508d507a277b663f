//! The fault test: a child process saves dataset versions and a saved analysis in a loop
//! and is killed with SIGKILL at random moments, 30 times. After each kill every dataset
//! loads and equals either its previous or its new version, and so does the analysis.
//!
//! The child is this test binary run again with `WARDCAST_FAULT_CHILD` set to the data
//! folder; the same test function then plays the child's part.

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use serde_json::json;
use wardcast_contract::dataset::{CvSettings, SavedAnalysis};
use wardcast_contract::spec::ModelSpec;
use wardcast_store::{ImportOptions, Store, import_bytes};

use crate::common::same_frame;

const CHILD_ENV: &str = "WARDCAST_FAULT_CHILD";
const KILLS: usize = 30;
const ANALYSIS_ID: &str = "fault-analysis";

/// The table saved as version `v`: 500 rows whose values depend on `v`.
fn content(v: u64) -> String {
    let mut s = String::from("district_code,incidents,residents,share_pct\n");
    for i in 0..500u64 {
        s.push_str(&format!("D{i:04},{},{},{}.{}\n", (v * 7 + i) % 50, 1000 + v + i, v % 90, i % 10));
    }
    s
}

fn analysis(v: u64) -> SavedAnalysis {
    SavedAnalysis {
        schema_version: "wardcast.v1".into(),
        id: ANALYSIS_ID.into(),
        title: format!("run {v}"),
        dataset_version: format!("fault@{v}"),
        question: "Does the store survive being killed?".into(),
        author: "fault test".into(),
        model_spec: ModelSpec::new("incidents", ["share_pct"]),
        cv: CvSettings { folds: 5, seeds: vec![v] },
        scenario: json!({}),
        allocation: json!({}),
        created_unix: 0,
        updated_unix: 0,
    }
}

/// The child's part: save forever, reporting each completed save on standard output.
fn child(root: &Path) -> ! {
    let (mut store, _) = match Store::open(root) {
        Ok(s) => s,
        Err(e) => panic!("child could not open the store: {e}"),
    };
    let mut v = store.manifest("fault").map_or(0, |m| u64::from(m.version));
    let mut out = std::io::stdout().lock();
    loop {
        v += 1;
        let staged =
            import_bytes(content(v).as_bytes(), "fault.csv", &ImportOptions::default()).expect("import");
        store.save_import("fault", &staged).expect("save dataset");
        writeln!(out, "committed dataset {v}").and_then(|()| out.flush()).expect("report");
        store.save_analysis(analysis(v)).expect("save analysis");
        writeln!(out, "committed analysis {v}").and_then(|()| out.flush()).expect("report");
    }
}

/// The last number reported for `what` ("dataset" or "analysis").
fn last_reported(lines: &[String], what: &str) -> u64 {
    let prefix = format!("committed {what} ");
    lines
        .iter()
        .filter_map(|l| l.strip_prefix(&prefix))
        .filter_map(|n| n.trim().parse().ok())
        .max()
        .unwrap_or(0)
}

#[test]
fn sigkill_during_saves_loses_nothing() {
    if let Some(root) = std::env::var_os(CHILD_ENV) {
        child(&PathBuf::from(root));
    }
    let dir = tempfile::tempdir().expect("temp dir");
    let root = dir.path().join("data");
    let exe = std::env::current_exe().expect("test binary");
    let started = Instant::now();
    // Committed versions so far, as the child reported them.
    let (mut datasets, mut analyses) = (0u64, 0u64);
    let mut state = 0x9E37_79B9_7F4A_7C15_u64;
    let mut interrupted_writes = 0usize;
    for kill in 0..KILLS {
        let mut proc = Command::new(&exe)
            .args(["fault::sigkill_during_saves_loses_nothing", "--exact", "--nocapture", "--test-threads=1"])
            .env(CHILD_ENV, &root)
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .expect("spawn child");
        let stdout = proc.stdout.take().expect("child stdout");
        let reader = std::thread::spawn(move || {
            BufReader::new(stdout).lines().map_while(Result::ok).collect::<Vec<_>>()
        });
        // A random moment: 20 to 400 ms after the start (xorshift, fixed seed).
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        std::thread::sleep(Duration::from_millis(20 + state % 380));
        proc.kill().expect("SIGKILL");
        proc.wait().expect("reap child");
        let lines = reader.join().expect("reader thread");
        let (d, a) =
            (last_reported(&lines, "dataset").max(datasets), last_reported(&lines, "analysis").max(analyses));

        let (store, report) =
            Store::open(&root).unwrap_or_else(|e| panic!("kill {kill}: the store does not open: {e}"));
        for line in &report.log {
            assert!(
                line.starts_with("removed stray temporary file") || line.contains("no manifest refers to it"),
                "kill {kill}: only interrupted writes may be found, not damage: {line}"
            );
        }
        interrupted_writes += report.log.len();
        // Every dataset loads and equals its previous or its new version.
        let version = store.manifest("fault").map_or(0, |m| u64::from(m.version));
        assert!(
            version == d || version == d + 1,
            "kill {kill}: dataset at version {version}, child had committed {d}"
        );
        if version > 0 {
            let loaded = store.load("fault").expect("load latest");
            let expected = import_bytes(content(version).as_bytes(), "fault.csv", &ImportOptions::default())
                .expect("expected");
            assert!(
                same_frame(loaded.frame(), expected.frame()),
                "kill {kill}: version {version} holds other values"
            );
            assert_eq!(
                store.versions("fault").expect("versions").len() as u64,
                version,
                "no version is lost"
            );
        }
        match store.analysis(ANALYSIS_ID) {
            Ok(saved) => {
                let n: u64 = saved.title.trim_start_matches("run ").parse().expect("run number");
                assert!(n == a || n == a + 1, "kill {kill}: analysis at run {n}, child had committed {a}");
                assert_eq!(saved.dataset_version, format!("fault@{n}"));
            }
            Err(_) => assert_eq!(a, 0, "kill {kill}: a committed analysis is missing"),
        }
        datasets = version;
        analyses = store
            .analysis(ANALYSIS_ID)
            .map_or(0, |s| s.title.trim_start_matches("run ").parse().unwrap_or(0));
    }
    assert!(datasets >= 10, "the child made progress: {datasets} versions");
    eprintln!(
        "fault test: {KILLS} kills, {datasets} versions, {interrupted_writes} interrupted writes cleaned up, {:.1} s",
        started.elapsed().as_secs_f64()
    );
}

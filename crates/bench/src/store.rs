//! Benchmarks of CSV import, validation, persistence and model-matrix extraction.
//!
//! 1. A seeded 1,000,000-row × 32-column CSV (about 250 MB; ChaCha8, seed 5) is written to a
//!    temp folder. A child process (this binary again, with `WARDCAST_BENCH_IMPORT` set) then
//!    imports it (parse, infer types, validate) and persists it (Arrow IPC + manifest,
//!    checksummed, atomic), and reports its times and its peak resident memory (`VmHWM`), so
//!    the figure covers the import alone and not the generation of the file.
//! 2. A seeded 64-district table is stored; the timed step loads it (reading and verifying
//!    the checksum), converts it to the engine's table and builds the model matrix.

use std::fmt::Write as _;
use std::io::{BufWriter, Write};
use std::path::Path;
use std::process::Command;
use std::time::Instant;

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use wardcast_engine::{Design, ModelSpec, Predictor};
use wardcast_store::{ImportOptions, Store, import_file};

use crate::report::{Table, median_time, ms, peak_rss_mib};

const CHILD_ENV: &str = "WARDCAST_BENCH_IMPORT";
const BIG_ROWS: usize = 1_000_000;
const TYPES: [&str; 3] = ["residential", "mixed", "centre"];

/// Writes the seeded large CSV: a key, a category, two whole-number columns and 28 decimals.
fn write_big_csv(path: &Path) -> std::io::Result<u64> {
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let mut w = BufWriter::with_capacity(1 << 20, std::fs::File::create(path)?);
    let mut line = String::with_capacity(512);
    line.push_str("district_code,district_type,residents,incidents");
    for j in 0..28 {
        let _ = write!(line, ",indicator_{j:02}");
    }
    line.push('\n');
    w.write_all(line.as_bytes())?;
    for i in 0..BIG_ROWS {
        line.clear();
        let t = TYPES[rng.random_range(0..3usize)];
        let residents: u32 = rng.random_range(1_000..100_000);
        let incidents: u32 = rng.random_range(0..1_000);
        let _ = write!(line, "D{i:07},{t},{residents},{incidents}");
        for _ in 0..28 {
            let cents: u32 = rng.random_range(0..1_000_000);
            let _ = write!(line, ",{}.{:02}", cents / 100, cents % 100);
        }
        line.push('\n');
        w.write_all(line.as_bytes())?;
    }
    w.flush()?;
    Ok(std::fs::metadata(path)?.len())
}

/// The child's part: import and persist, then print `import_ms save_ms peak_mib rows`.
fn child(spec: &str) -> ! {
    let mut parts = spec.splitn(2, '\n');
    let (csv, data) = (parts.next().unwrap_or_default(), parts.next().unwrap_or_default());
    let started = Instant::now();
    let staged = match import_file(Path::new(csv), &ImportOptions::default()) {
        Ok(s) => s,
        Err(e) => {
            eprintln!("import failed: {e}");
            std::process::exit(1);
        }
    };
    let import_ms = started.elapsed().as_secs_f64() * 1e3;
    let saved = Store::open(data).and_then(|(mut store, _)| store.save_import("bench", &staged));
    if let Err(e) = saved {
        eprintln!("save failed: {e}");
        std::process::exit(1);
    }
    let total_ms = started.elapsed().as_secs_f64() * 1e3;
    let rows = staged.report().rows;
    let problems = staged.report().problems.len();
    drop(staged);
    println!("{import_ms} {} {} {rows} {problems}", total_ms - import_ms, peak_rss_mib().unwrap_or(f64::NAN));
    std::process::exit(0);
}

fn big_import(table: &mut Table) -> Result<(), String> {
    let dir = tempfile::tempdir().map_err(|e| e.to_string())?;
    let csv = dir.path().join("big.csv");
    let bytes = write_big_csv(&csv).map_err(|e| e.to_string())?;
    let mib = bytes as f64 / (1024.0 * 1024.0);
    let exe = std::env::current_exe().map_err(|e| e.to_string())?;
    let spec = format!("{}\n{}", csv.display(), dir.path().join("data").display());
    let out = Command::new(exe).arg("store").env(CHILD_ENV, spec).output().map_err(|e| e.to_string())?;
    if !out.status.success() {
        return Err(String::from_utf8_lossy(&out.stderr).trim().to_owned());
    }
    let text = String::from_utf8_lossy(&out.stdout);
    let f: Vec<f64> = text.split_whitespace().filter_map(|x| x.parse().ok()).collect();
    let [import_ms, save_ms, peak, rows, problems] = f[..] else {
        return Err(format!("unexpected child output: {text}"));
    };
    let case = format!("import CSV {rows:.0} rows x 32 cols ({mib:.0} MiB)");
    table.push(format!("{case}: parse+infer+validate"), format!("{:.0} ms", import_ms), "-");
    table.push(format!("{case}: persist (IPC+SHA-256+fsync)"), format!("{:.0} ms", save_ms), "-");
    table.push(format!("{case}: total"), format!("{:.0} ms", import_ms + save_ms), "< 3000 ms");
    table.push(
        format!("{case}: peak memory (child process)"),
        format!("{peak:.0} MiB = {:.2}x", peak / mib),
        "< 2.5x file size",
    );
    table.push(format!("{case}: problems listed"), format!("{problems:.0}"), "0");
    Ok(())
}

/// Stores a seeded 64-district table and returns the store and a model spec over it.
fn small_table(dir: &Path) -> Result<(Store, ModelSpec), String> {
    let mut rng = ChaCha8Rng::seed_from_u64(64);
    let mut csv = String::from("district_code,district_type,residents,rate_per_10k");
    let indicators = [
        "unemployment_pct",
        "youth_share_pct",
        "vacancy_pct",
        "outlets_per_1k",
        "seats_per_100",
        "outages_per_km",
        "income",
    ];
    for name in indicators {
        let _ = write!(csv, ",{name}");
    }
    csv.push('\n');
    for i in 0..64 {
        let t = TYPES[i % 3];
        let _ = write!(
            csv,
            "LK-{:02},{t},{},{:.1}",
            i + 1,
            rng.random_range(3_000..23_000u32),
            rng.random_range(8.0..100.0f64)
        );
        for _ in indicators {
            let _ = write!(csv, ",{:.2}", rng.random_range(0.5..60.0f64));
        }
        csv.push('\n');
    }
    let staged = wardcast_store::import_bytes(csv.as_bytes(), "districts.csv", &ImportOptions::default())
        .map_err(|e| e.to_string())?;
    let (mut store, _) = Store::open(dir).map_err(|e| e.to_string())?;
    store.save_import("districts", &staged).map_err(|e| e.to_string())?;
    let mut spec = ModelSpec::new("rate_per_10k", &indicators);
    spec.predictors.push(Predictor {
        column: "district_type".into(),
        transform: None,
        reference_level: None,
    });
    Ok((store, spec))
}

fn small_load(table: &mut Table) -> Result<(), String> {
    let dir = tempfile::tempdir().map_err(|e| e.to_string())?;
    let (store, spec) = small_table(dir.path())?;
    let reps = 300;
    let load = median_time(reps, || store.load("districts").map(|d| d.nrows()));
    let loaded = store.load("districts").map_err(|e| e.to_string())?;
    let convert = median_time(reps, || loaded.to_engine_table().map(|t| t.nrows()));
    let all = median_time(reps, || {
        let d = store.load("districts").map_err(|e| e.to_string())?;
        let t = d.to_engine_table().map_err(|e| e.to_string())?;
        Design::build(&t, &spec).map(|x| x.x().ncols()).map_err(|e| e.to_string())
    });
    let design = store
        .load("districts")
        .and_then(|d| d.to_engine_table())
        .map_err(|e| e.to_string())
        .and_then(|t| Design::build(&t, &spec).map_err(|e| e.to_string()))?;
    let shape = format!("{}x{}", design.x().nrows(), design.x().ncols());
    table.push("load 64-district table (read + verify checksum + parse)", ms(load), "-");
    table.push("convert to engine table", ms(convert), "-");
    table.push(format!("load + convert + build model matrix ({shape})"), ms(all), "< 5 ms");
    Ok(())
}

/// Runs the store benchmarks.
pub fn run(table: &mut Table) {
    if let Ok(spec) = std::env::var(CHILD_ENV) {
        child(&spec);
    }
    if let Err(e) = small_load(table) {
        table.push("load 64-district table", format!("failed: {e}"), "< 5 ms");
    }
    if let Err(e) = big_import(table) {
        table.push("import 1,000,000 x 32 CSV", format!("failed: {e}"), "< 3000 ms");
    }
}

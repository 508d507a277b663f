//! Builds the documents of a demo-like analysis from the engine on the invented Larkmoor data.
//!
//! The demo CSV is plain (no quoted fields), so it is parsed by hand. The rate is derived as
//! assaults / residents × 10,000, the model fitted with four indicators, the checks run, and
//! a small model choice (best subsets, seeded CV, partial F tests) made from the engine's
//! selection functions.

use std::path::PathBuf;

use wardcast_contract::checks::ChecksDocument;
use wardcast_contract::dataset::{ColumnMeta, ColumnRole};
use wardcast_contract::fit::FitDocument;
use wardcast_contract::spec::{ExclusionSpec, ModelSpec};
use wardcast_engine::diagnostics::{self, CheckOptions};
use wardcast_engine::{Column, Design, Fit, FitOptions, Table};
use wardcast_report::brief::{BriefInput, ChoiceCv, DatasetChecksum, ModelChoice, model_choice};

/// The predictors of the reported model.
pub const PREDICTORS: [&str; 4] =
    ["unemployment_pct", "vacancy_pct", "alcohol_outlets_per_1k", "median_income"];

/// The numeric indicators offered to the subset search.
const CANDIDATES: [&str; 7] = [
    "median_income",
    "unemployment_pct",
    "youth_share_pct",
    "vacancy_pct",
    "alcohol_outlets_per_1k",
    "afterschool_seats_per_100",
    "streetlight_outages_per_km",
];

fn demo_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../demo")
}

/// Reads the demo districts into an engine table with the derived rate.
pub fn demo_table() -> Table {
    let text =
        std::fs::read_to_string(demo_dir().join("larkmoor_districts.csv")).expect("the demo CSV is readable");
    let mut lines = text.lines().filter(|l| !l.trim().is_empty());
    let header: Vec<&str> = lines.next().expect("a header").split(',').collect();
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert!(rows.iter().all(|r| r.len() == header.len()), "every demo row has every column");
    let col =
        |name: &str| header.iter().position(|h| *h == name).unwrap_or_else(|| panic!("no column {name}"));
    let keys: Vec<String> = rows.iter().map(|r| r[col("district_code")].to_owned()).collect();
    let numeric = |name: &str| -> Vec<f64> {
        rows.iter()
            .map(|r| r[col(name)].parse::<f64>().unwrap_or_else(|_| panic!("{name} is numeric")))
            .collect()
    };
    // Indicators may be blank (the demo plants a few gaps); a blank is a missing value.
    let optional = |name: &str| -> Vec<Option<f64>> {
        rows.iter()
            .map(|r| {
                let cell = r[col(name)].trim();
                (!cell.is_empty())
                    .then(|| cell.parse::<f64>().unwrap_or_else(|_| panic!("{name} is numeric")))
            })
            .collect()
    };
    let residents = numeric("residents");
    let assaults = numeric("assaults");
    let rate: Vec<f64> = assaults.iter().zip(&residents).map(|(a, r)| a / r * 10_000.0).collect();
    let mut columns = vec![
        Column::from_f64("residents", &residents),
        Column::from_f64("assaults", &assaults),
        Column::from_f64("assault_rate_per_10k", &rate),
    ];
    for name in CANDIDATES {
        columns.push(Column::numeric(name, optional(name)));
    }
    let types: Vec<&str> = rows.iter().map(|r| r[col("district_type")]).collect();
    columns.push(Column::from_strs("district_type", &types));
    Table::new(keys, columns).expect("the demo table is valid")
}

/// The demo column metadata, read from demo/larkmoor_columns.json.
pub fn demo_columns() -> Vec<ColumnMeta> {
    let text = std::fs::read_to_string(demo_dir().join("larkmoor_columns.json"))
        .expect("the demo metadata is readable");
    let value: serde_json::Value = serde_json::from_str(&text).expect("the demo metadata is JSON");
    value
        .as_array()
        .expect("a list of columns")
        .iter()
        .map(|c| {
            let s = |k: &str| c.get(k).and_then(|v| v.as_str()).map(str::to_owned);
            // The demo file also uses the roles "name" and "category"; both are groups here.
            let role = match s("role").as_deref() {
                Some("name") => ColumnRole::Group,
                Some(other) => ColumnRole::parse(other).unwrap_or(ColumnRole::Indicator),
                None => ColumnRole::Indicator,
            };
            ColumnMeta {
                column: s("column").expect("a column name"),
                label: s("label"),
                unit: s("unit").filter(|u| !u.is_empty()),
                source: s("source"),
                vintage: c
                    .get("vintage")
                    .and_then(serde_json::Value::as_i64)
                    .and_then(|v| i32::try_from(v).ok()),
                role,
            }
        })
        .collect()
}

/// The reported model's spec: four indicators, the arena district excluded with a reason.
pub fn demo_spec() -> ModelSpec {
    let mut spec = ModelSpec::new("assault_rate_per_10k", PREDICTORS);
    spec.exclusions.push(ExclusionSpec {
        key: "LK-47".into(),
        reason: "event arena: visitor numbers, not residents, drive its incident count".into(),
    });
    spec
}

/// Fits the spec and builds the fit and checks documents.
pub fn documents(table: &Table, spec: &ModelSpec) -> (FitDocument, ChecksDocument) {
    let design = Design::build(table, &spec.to_engine().expect("a valid spec")).expect("the design builds");
    let fit = Fit::new(&design, &FitOptions::default()).expect("the model fits");
    let fit_doc = FitDocument::from_fit(&fit, spec).expect("the fit document builds");
    let checks = diagnostics::run(&fit, &CheckOptions::default());
    (fit_doc, ChecksDocument::from_checks(&checks, spec))
}

/// The model choice, built by the report crate's own [`model_choice`] (the same code the
/// command line uses): best subsets of the seven candidates, seeded 5-fold CV with 3 repeats,
/// and partial F tests of adding each other indicator to the reported model.
pub fn demo_model_choice(table: &Table, spec: &ModelSpec) -> ModelChoice {
    let candidates: Vec<String> = CANDIDATES.iter().map(|c| (*c).to_owned()).collect();
    let cv = ChoiceCv { folds: 5, repeats: 3, seed: 20_261_201 };
    let choice = model_choice(table, spec, &candidates, &cv).expect("the model choice runs");
    assert!(
        choice.candidates.iter().any(|c| c.chosen),
        "the reported model is among the compared candidates"
    );
    choice
}

/// The SHA-256 of the demo CSV, standing in for a stored version's checksum.
fn demo_checksum() -> String {
    use sha2::Digest;
    let bytes = std::fs::read(demo_dir().join("larkmoor_districts.csv")).expect("the demo CSV is readable");
    format!("sha256:{}", hex::encode(sha2::Sha256::digest(&bytes)))
}

/// The whole brief input of the demo analysis.
pub fn demo_input() -> BriefInput {
    let table = demo_table();
    let spec = demo_spec();
    let (fit, checks) = documents(&table, &spec);
    BriefInput {
        question: "Which district conditions are associated with higher assault rates, to inform the 2027 prevention budget?".into(),
        author: "A. Analyst, Larkmoor Budget Office".into(),
        date: "2026-12-01".into(),
        wardcast_version: "0.1.0-test".into(),
        fit,
        checks: Some(checks),
        model_choice: Some(demo_model_choice(&table, &spec)),
        allocation: None,
        scenarios: Vec::new(),
        columns: demo_columns(),
        join: None,
        checksums: vec![DatasetChecksum { version_id: "larkmoor-districts@1".into(), checksum: demo_checksum() }],
        data_notes: vec!["Four indicator values are blank in the district table; those districts are left out of the model, as listed above.".into()],
        district_predictions: Vec::new(),
        counts_from_enforcement: true,
    }
}

/// An allocation of `total` on the demo's fitted districts through the engine, as its
/// contract document: the given basis, a floor, seeded draws, and this year's budgets read
/// from demo/larkmoor_budgets.csv (two of its codes match no district).
pub fn demo_allocation(
    total: u64,
    basis: wardcast_engine::allocation::Basis,
) -> wardcast_contract::allocation::AllocationDocument {
    use wardcast_engine::allocation::{
        AllocationOptions, BudgetRow, DistrictInput, ExpectedModel, SimulationOptions, allocate,
    };
    let table = demo_table();
    let spec = demo_spec();
    let design = Design::build(&table, &spec.to_engine().expect("a valid spec")).expect("the design builds");
    let fit = Fit::new(&design, &FitOptions::default()).expect("the model fits");
    let value = |name: &str, i: usize| match &table.column(name).expect("column").data {
        wardcast_engine::ColumnData::Numeric(v) => v[i].expect("a value"),
        wardcast_engine::ColumnData::Text(_) => panic!("{name} is numeric"),
    };
    let districts: Vec<DistrictInput> = table
        .keys()
        .iter()
        .enumerate()
        .filter(|(_, k)| design.keys().contains(k))
        .map(|(i, k)| DistrictInput {
            key: k.clone(),
            residents: value("residents", i),
            observed: value("assaults", i),
        })
        .collect();
    let text =
        std::fs::read_to_string(demo_dir().join("larkmoor_budgets.csv")).expect("the budget CSV is readable");
    let budgets: Vec<BudgetRow> = text
        .lines()
        .skip(1)
        .filter(|l| !l.trim().is_empty())
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            BudgetRow { key: cells[0].to_owned(), amount: cells[1].trim().parse().expect("a whole amount") }
        })
        .collect();
    let model = ExpectedModel { fit: &fit, rate_unit: 10_000.0, extra_rows: Vec::new() };
    let options = AllocationOptions {
        total,
        basis,
        floor: Some(8_000),
        cap: None,
        simulation: SimulationOptions { draws: 500, seed: 2027 },
    };
    let allocation = allocate(&districts, &budgets, &model, &options).expect("the allocation runs");
    wardcast_contract::allocation::AllocationDocument::from_allocation(&allocation)
}

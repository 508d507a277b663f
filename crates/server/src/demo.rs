//! The bundled Larkmoor demo (invented data), loaded through the store as a user would.
//!
//! The CSVs are compiled into the binary so `wardcast serve` and `--demo` work from any
//! folder. The loader imports the district table, applies the column metadata, and derives
//! the outcome rate per 10,000 residents from the raw counts with the store's structured
//! derivation, exactly as an analyst would in the Tables page.

use std::path::Path;

use wardcast_contract::dataset::{ColumnMeta, ColumnRole, Derivation, DerivedColumn};
use wardcast_store::dataset::{Draft, engine_table};
use wardcast_store::{ImportOptions, StoreError, import_bytes, import_file};

/// The district table as committed in `demo/`.
pub const DISTRICTS_CSV: &[u8] = include_bytes!("../../../demo/larkmoor_districts.csv");
/// The programme-budget table from another department, with two unmatched codes.
pub const BUDGETS_CSV: &[u8] = include_bytes!("../../../demo/larkmoor_budgets.csv");
/// Column metadata: labels, units, sources, vintages and roles.
pub const COLUMNS_JSON: &str = include_str!("../../../demo/larkmoor_columns.json");

/// The demo's region key column.
pub const KEY: &str = "district_code";
/// The derived outcome column.
pub const RATE: &str = "assault_rate_per_10k";
/// The demo's default predictors.
pub const DEFAULT_PREDICTORS: [&str; 5] = [
    "unemployment_pct",
    "youth_share_pct",
    "vacancy_pct",
    "alcohol_outlets_per_1k",
    "afterschool_seats_per_100",
];

/// Reads the demo's column metadata, mapping its descriptive roles onto the store's roles.
pub fn column_meta() -> Vec<ColumnMeta> {
    let Ok(serde_json::Value::Array(items)) = serde_json::from_str::<serde_json::Value>(COLUMNS_JSON) else {
        return Vec::new();
    };
    items
        .iter()
        .filter_map(|item| {
            let text =
                |k: &str| item.get(k).and_then(|v| v.as_str()).filter(|s| !s.is_empty()).map(str::to_owned);
            let role = match text("role")?.as_str() {
                "key" => ColumnRole::Key,
                "count" => ColumnRole::Count,
                "population" => ColumnRole::Population,
                "rate" => ColumnRole::Rate,
                "name" | "group" | "category" => ColumnRole::Group,
                _ => ColumnRole::Indicator,
            };
            Some(ColumnMeta {
                column: text("column")?,
                label: text("label"),
                unit: text("unit"),
                source: text("source"),
                vintage: item.get("vintage").and_then(|v| v.as_i64()).and_then(|v| i32::try_from(v).ok()),
                role,
            })
        })
        .collect()
}

/// The district table as a draft dataset: imported, described, with the rate derived.
pub fn larkmoor_draft() -> Result<Draft, StoreError> {
    let options = ImportOptions { key: Some(KEY.to_owned()), ..ImportOptions::default() };
    let staged = import_bytes(DISTRICTS_CSV, "larkmoor_districts.csv", &options)?;
    let mut draft = Draft::from_import(&staged)?;
    let metas = column_meta();
    for meta in metas.iter().filter(|m| m.column != RATE) {
        if draft.columns().iter().any(|c| c.meta.column == meta.column) {
            draft.set_meta(meta.clone())?;
        }
    }
    draft.add_derived(DerivedColumn {
        name: RATE.to_owned(),
        derivation: Derivation::RatePer {
            count: "assaults".into(),
            population: "residents".into(),
            per: 10_000.0,
        },
        meta: metas.into_iter().find(|m| m.column == RATE),
    })?;
    Ok(draft)
}

/// The budget table as a draft dataset keyed by district code.
pub fn budgets_draft() -> Result<Draft, StoreError> {
    let options = ImportOptions { key: Some(KEY.to_owned()), ..ImportOptions::default() };
    let staged = import_bytes(BUDGETS_CSV, "larkmoor_budgets.csv", &options)?;
    Draft::from_import(&staged)
}

/// The demo district table as an engine table, rate derived.
pub fn larkmoor_table() -> Result<wardcast_engine::Table, StoreError> {
    let draft = larkmoor_draft()?;
    engine_table(draft.frame(), draft.key())
}

/// Imports a CSV or XLSX file with the given key column and returns it as an engine table.
///
/// A table with blocking problems (duplicate or blank keys) is refused with the reasons.
pub fn table_from_file(path: &Path, key: &str) -> Result<wardcast_engine::Table, StoreError> {
    let options = ImportOptions { key: Some(key.to_owned()), ..ImportOptions::default() };
    let staged = import_file(path, &options)?;
    let draft = Draft::from_import(&staged)?;
    engine_table(draft.frame(), draft.key())
}

/// The SHA-256 of the bundled district CSV, as `sha256:<hex>`.
pub fn districts_checksum() -> String {
    wardcast_store::content_checksum(DISTRICTS_CSV)
}

//! The analysis `wardcast serve` starts with: the invented Larkmoor district table joined to
//! this year's programme budgets, loaded through the store as a user would load them, and
//! fitted on the demo's default indicators.

use std::sync::Arc;

use wardcast_contract::dataset::JoinKind;
use wardcast_contract::spec::ModelSpec;
use wardcast_report::brief::DatasetChecksum;

use super::state::{Analysis, AnalysisParts, AppState, Glossary, Source};
use crate::demo;
use crate::error::{Result, ServerError};

/// The demo analysis' id, so its page is `/analyses/larkmoor`.
pub const DEMO_ID: &str = "larkmoor";

/// The demo model: the assault rate per 10,000 residents on the demo's default indicators.
pub fn demo_spec() -> ModelSpec {
    ModelSpec::new(demo::RATE, demo::DEFAULT_PREDICTORS)
}

/// The demo source: the district table (rate derived) left-joined to the budget table, with
/// the demo's column metadata, the join report and the checksums of both bundled files.
/// Blocking (import and join).
pub fn demo_source() -> Result<Source> {
    let districts = demo::larkmoor_draft()?;
    let budgets = demo::budgets_draft()?;
    let joined = wardcast_store::join(&districts, &budgets, JoinKind::Left)?;
    let draft = joined.draft.ok_or_else(|| {
        ServerError::Internal("the demo budget table repeats a district code, so it cannot be joined".into())
    })?;
    let table = wardcast_store::engine_table(draft.frame(), draft.key())?;
    let mut notes = Vec::new();
    if !joined.report.unmatched_right.is_empty() {
        notes.push(format!(
            "The budget table has rows for codes that match no district ({}); they were left out.",
            joined.report.unmatched_right.join(", ")
        ));
    }
    if !joined.report.unmatched_left.is_empty() {
        notes.push(format!(
            "These districts have no row in the budget table, so their current budget is unknown: {}.",
            joined.report.unmatched_left.join(", ")
        ));
    }
    Ok(Source {
        name: "Larkmoor districts with programme budgets".into(),
        table,
        columns: demo::column_meta(),
        checksums: vec![
            DatasetChecksum {
                version_id: "larkmoor_districts.csv".into(),
                checksum: demo::districts_checksum(),
            },
            DatasetChecksum {
                version_id: "larkmoor_budgets.csv".into(),
                checksum: wardcast_store::content_checksum(demo::BUDGETS_CSV),
            },
        ],
        join: Some(joined.report),
        notes,
        dataset: None,
    })
}

/// The demo analysis: the demo source with its column labels and units, comparison steps
/// chosen from the data, fitted with [`demo_spec`], diagnostics computed. Blocking; call it
/// from `spawn_blocking` inside the runtime.
pub fn demo_analysis() -> Result<Analysis> {
    let source = demo_source()?;
    let glossary = Glossary::from_meta("districts", &source.columns).with_steps_from(&source.table);
    let analysis = Analysis::build(AnalysisParts {
        id: DEMO_ID.into(),
        name: "Larkmoor demo".into(),
        glossary,
        source: Arc::new(source),
        spec: demo_spec(),
        parent: None,
    })?;
    analysis.checks();
    Ok(analysis)
}

/// A workspace holding the demo analysis.
pub fn demo_state() -> Result<AppState> {
    let state = AppState::new();
    state.insert(demo_analysis()?)?;
    Ok(state)
}

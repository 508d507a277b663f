//! The analysis `wardcast serve` starts with: the invented Larkmoor district table joined to
//! this year's programme budgets, loaded through the store as a user would load them, and
//! fitted on the demo's default indicators.

use std::sync::Arc;

use wardcast_contract::dataset::{DatasetManifest, JoinKind, JoinReport};
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::Table;
use wardcast_report::brief::DatasetChecksum;
use wardcast_store::{Draft, Store};

use super::state::{Analysis, AnalysisParts, AppState, Glossary, Source};
use crate::demo;
use crate::error::{Result, ServerError};

/// The demo analysis' id, so its page is `/analyses/larkmoor`.
pub const DEMO_ID: &str = "larkmoor";

/// The demo model: the assault rate per 10,000 residents on the demo's default indicators.
pub fn demo_spec() -> ModelSpec {
    ModelSpec::new(demo::RATE, demo::DEFAULT_PREDICTORS)
}

/// The name the demo's joined table is kept under in a data folder.
pub const DEMO_DATASET: &str = "Larkmoor districts with programme budgets";

/// The district table (rate derived) left-joined to the budget table, as a draft, with the
/// join report. Blocking (import and join).
fn joined_draft() -> Result<(Draft, JoinReport)> {
    let districts = demo::larkmoor_draft()?;
    let budgets = demo::budgets_draft()?;
    let joined = wardcast_store::join(&districts, &budgets, JoinKind::Left)?;
    let draft = joined.draft.ok_or_else(|| {
        ServerError::Internal("the demo budget table repeats a district code, so it cannot be joined".into())
    })?;
    Ok((draft, joined.report))
}

/// The source around a joined demo table: column metadata, notes on the join and the
/// checksums of both bundled files.
fn source_of(table: Table, report: JoinReport) -> Source {
    let mut notes = Vec::new();
    if !report.unmatched_right.is_empty() {
        notes.push(format!(
            "The budget table has rows for codes that match no district ({}); they were left out.",
            report.unmatched_right.join(", ")
        ));
    }
    if !report.unmatched_left.is_empty() {
        notes.push(format!(
            "These districts have no row in the budget table, so their current budget is unknown: {}.",
            report.unmatched_left.join(", ")
        ));
    }
    Source {
        name: DEMO_DATASET.into(),
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
        join: Some(report),
        notes,
        dataset: None,
    }
}

/// The demo source: the district table (rate derived) left-joined to the budget table, with
/// the demo's column metadata, the join report and the checksums of both bundled files.
/// Blocking (import and join).
pub fn demo_source() -> Result<Source> {
    let (draft, report) = joined_draft()?;
    let table = wardcast_store::engine_table(draft.frame(), draft.key())?;
    Ok(source_of(table, report))
}

/// The demo source kept in `store`, so analyses of the demo can be saved: the joined table is
/// saved as [`DEMO_DATASET`] unless the latest stored version already holds the same values
/// and columns (so restarts do not pile up versions), and the source refers to that version
/// and lists its checksum. Blocking (import, join, disk).
pub fn demo_source_in_store(store: &mut Store) -> Result<Source> {
    let (draft, report) = joined_draft()?;
    let table = wardcast_store::engine_table(draft.frame(), draft.key())?;
    let same = |m: &DatasetManifest| -> Result<bool> {
        if m.columns.as_slice() != draft.columns() || m.derived.as_slice() != draft.derived() {
            return Ok(false);
        }
        Ok(store.load(&m.version_id)?.to_engine_table()? == table)
    };
    let existing = match store.manifest(DEMO_DATASET) {
        Ok(m) if same(m)? => Some(m.clone()),
        _ => None,
    };
    let manifest = match existing {
        Some(m) => m,
        None => store.save(DEMO_DATASET, draft)?,
    };
    let mut source = source_of(table, report);
    source.checksums.push(DatasetChecksum {
        version_id: manifest.version_id.clone(),
        checksum: manifest.checksum.clone(),
    });
    source.dataset = Some(manifest.version_id);
    Ok(source)
}

/// The demo analysis: the demo source with its column labels and units, comparison steps
/// chosen from the data, fitted with [`demo_spec`], diagnostics computed. Blocking; call it
/// from `spawn_blocking` inside the runtime.
pub fn demo_analysis() -> Result<Analysis> {
    demo_analysis_on(Arc::new(demo_source()?))
}

/// The demo analysis on a given demo source (stored or not). Blocking.
fn demo_analysis_on(source: Arc<Source>) -> Result<Analysis> {
    let glossary = Glossary::from_meta("districts", &source.columns).with_steps_from(&source.table);
    let analysis = Analysis::build(AnalysisParts {
        id: DEMO_ID.into(),
        name: "Larkmoor demo".into(),
        glossary,
        source,
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

/// A workspace kept in `store`: the demo analysis on the stored demo table (on the bundled
/// table alone, with a warning in the log, when the data folder refuses it), then every saved
/// analysis re-fitted under its saved id. Analyses that cannot be restored are named in the
/// log and left out. Blocking; call it from `spawn_blocking` inside the runtime.
pub fn demo_state_in_store(mut store: Store) -> Result<AppState> {
    let source = match demo_source_in_store(&mut store) {
        Ok(source) => source,
        Err(e) => {
            tracing::warn!(error = %e, "the demo table could not be kept in the data folder; the demo cannot be saved");
            demo_source()?
        }
    };
    let demo = demo_analysis_on(Arc::new(source))?;
    let known = [(demo.source().clone(), demo.glossary().clone())];
    let state = AppState::new().with_store(store);
    state.insert(demo)?;
    for problem in super::setup::restore_saved(&state, &known)? {
        tracing::warn!("{problem}");
    }
    Ok(state)
}

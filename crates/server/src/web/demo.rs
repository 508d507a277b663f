//! The analysis `wardcast serve` starts with: the invented Larkmoor table, loaded through the
//! store as a user would load it, fitted on the demo's default indicators.

use wardcast_contract::spec::ModelSpec;

use super::state::{Analysis, AppState, Glossary};
use crate::analysis::Fitted;
use crate::demo;
use crate::error::Result;

/// The demo analysis' id, so its page is `/analyses/larkmoor`.
pub const DEMO_ID: &str = "larkmoor";

/// The demo model: the assault rate per 10,000 residents on the demo's default indicators.
pub fn demo_spec() -> ModelSpec {
    ModelSpec::new(demo::RATE, demo::DEFAULT_PREDICTORS)
}

/// The demo analysis: the Larkmoor table with its column labels and units, comparison steps
/// chosen from the data, fitted with [`demo_spec`]. Blocking (import and fit); call it from
/// `spawn_blocking` inside the runtime.
pub fn demo_analysis() -> Result<Analysis> {
    let table = demo::larkmoor_table()?;
    let spec = demo_spec();
    let fitted = Fitted::new(&table, &spec)?;
    let glossary = Glossary::from_meta("districts", &demo::column_meta()).with_steps_from(&table);
    Analysis::from_fit(DEMO_ID, "Larkmoor demo", glossary, fitted.fit(), &spec)
}

/// A workspace holding the demo analysis.
pub fn demo_state() -> Result<AppState> {
    let state = AppState::new();
    state.insert(demo_analysis()?)?;
    Ok(state)
}

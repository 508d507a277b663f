//! The engine's integration tests: one binary, with one module per area.

#[path = "engine/allocation.rs"]
mod allocation;
#[path = "engine/areas.rs"]
mod areas;
#[path = "engine/common.rs"]
mod common;
#[path = "engine/design.rs"]
mod design;
#[path = "engine/diagnostics.rs"]
mod diagnostics;
#[path = "engine/dist_tails.rs"]
mod dist_tails;
#[path = "engine/errors.rs"]
mod errors;
#[path = "engine/fit_fixtures.rs"]
mod fit_fixtures;
#[path = "engine/linfa_cross.rs"]
mod linfa_cross;
#[path = "engine/nist.rs"]
mod nist;
#[path = "engine/selection.rs"]
mod selection;

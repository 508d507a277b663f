//! The Data section of an analysis: its source table, the model set-up form, refits and exclusions.

use axum::Router;

use super::Ctx;

/// The routes of this page (none yet).
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
}

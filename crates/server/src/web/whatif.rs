//! The What-if page: predictions for changed indicators, extrapolation flags, and allocation scenarios.

use axum::Router;

use super::Ctx;

/// The routes of this page (none yet).
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
}

//! The Areas page: observed against expected for every area, with leave-one-out prediction intervals.

use axum::Router;

use super::Ctx;

/// The routes of this page (none yet).
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
}

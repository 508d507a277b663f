//! The Soundness page: every diagnostic as a chart with its verdict, flagged areas and refits without them.

use axum::Router;

use super::Ctx;

/// The routes of this page (none yet).
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
}

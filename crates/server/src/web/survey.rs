//! The Survey page: each column's summary and distribution, the scatter-plot matrix and the correlation heat map.

use axum::Router;

use super::Ctx;

/// The routes of this page (none yet).
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
}

//! The Tables pages: upload, validate, join, derive and describe datasets before modelling.

use axum::Router;

use super::Ctx;

/// The routes of this page (none yet).
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
}

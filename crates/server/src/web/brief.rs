//! The Brief page: the budgeting brief in the browser and its downloads (PDF, HTML, CSV, XLSX).

use axum::Router;

use super::Ctx;

/// The routes of this page (none yet).
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
}

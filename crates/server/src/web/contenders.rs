//! The Contenders page: best subsets, cross-validated comparison, nested F tests and the drop-one table.

use axum::Router;

use super::Ctx;

/// The routes of this page (none yet).
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
}

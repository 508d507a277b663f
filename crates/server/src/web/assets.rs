//! The static assets (stylesheets, the icon, small scripts), compiled into the binary so
//! `wardcast serve` works from any folder, served under `/assets/`.
//!
//! The list is explicit; a router test checks that every file in the repository's `assets/`
//! folder (the fonts aside, which go into the PDF brief, not the browser) is on it.

use axum::extract::Path;
use axum::http::{HeaderValue, header};
use axum::response::{IntoResponse, Response};

use crate::error::ServerError;

/// One embedded file.
#[derive(Debug, Clone, Copy)]
pub struct Asset {
    /// The path under `/assets/`.
    pub name: &'static str,
    /// Its media type.
    pub content_type: &'static str,
    /// Its bytes.
    pub bytes: &'static [u8],
}

macro_rules! asset {
    ($name:literal, $type:literal) => {
        Asset {
            name: $name,
            content_type: $type,
            bytes: include_bytes!(concat!(env!("CARGO_MANIFEST_DIR"), "/../../assets/", $name)),
        }
    };
}

/// Every asset the pages use, one per line.
#[rustfmt::skip]
pub const ASSETS: &[Asset] = &[
    asset!("style.css", "text/css; charset=utf-8"),
    asset!("icon.svg", "image/svg+xml"),
    asset!("tables.css", "text/css; charset=utf-8"),
    asset!("setup.css", "text/css; charset=utf-8"),
    asset!("soundness.css", "text/css; charset=utf-8"),
    asset!("whatif.css", "text/css; charset=utf-8"),
    asset!("brief.css", "text/css; charset=utf-8"),
    asset!("survey.css", "text/css; charset=utf-8"),
    asset!("contenders.css", "text/css; charset=utf-8"),
];

/// The asset at `name`, if there is one.
pub fn find(name: &str) -> Option<&'static Asset> {
    ASSETS.iter().find(|a| a.name == name)
}

/// `GET /assets/{*name}`.
pub(crate) async fn serve(Path(name): Path<String>) -> Response {
    match find(&name) {
        Some(asset) => {
            let mut response = asset.bytes.into_response();
            let headers = response.headers_mut();
            headers.insert(header::CONTENT_TYPE, HeaderValue::from_static(asset.content_type));
            headers.insert(header::CACHE_CONTROL, HeaderValue::from_static("no-cache"));
            response
        }
        None => ServerError::NotFound("There is no file at this address.".into()).into_response(),
    }
}

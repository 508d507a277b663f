//! The server's one error type, and how it turns into an HTTP response without leaking internals.
//!
//! Every handler returns [`Result`]. An error becomes a short HTML page (or, through
//! [`ApiError`], a JSON object) whose text is a plain sentence meant for the analyst. Details
//! that could leak internals — file paths, template errors, socket errors — are logged with
//! `tracing` and replaced by a generic sentence in the response.

use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};

/// Errors raised while serving wardcast.
#[non_exhaustive]
#[derive(Debug, thiserror::Error)]
pub enum ServerError {
    /// The listening socket could not be opened.
    #[error("could not listen on {address}: {source}")]
    Bind {
        /// The address we tried to bind.
        address: String,
        /// The operating system's reason.
        source: std::io::Error,
    },
    /// The server stopped with an I/O error.
    #[error("the web server stopped: {0}")]
    Serve(std::io::Error),
    /// No address on the local network could be found for `--share`.
    #[error("could not find this computer's address on the local network: {0}")]
    NoLanAddress(String),
    /// The operating system's random number source failed.
    #[error("could not draw random bytes for the sharing token: {0}")]
    Random(String),
    /// A page template failed to render (a bug, never the analyst's fault).
    #[error("a page could not be drawn: {0}")]
    Render(#[from] askama::Error),
    /// The request is malformed; the message says what to change.
    #[error("{0}")]
    BadRequest(String),
    /// The thing asked for does not exist; the message names it.
    #[error("{0}")]
    NotFound(String),
    /// The request is refused; the message says why in general terms.
    #[error("{0}")]
    Forbidden(String),
    /// The request body arrived too slowly.
    #[error("the request took too long to arrive")]
    Timeout,
    /// The request body is larger than allowed.
    #[error("the request is larger than the limit wardcast accepts for it")]
    TooLarge,
    /// The engine rejected the input; its messages are written for the analyst.
    #[error(transparent)]
    Engine(#[from] wardcast_engine::EngineError),
    /// The store refused a table or a file; its messages are written for the analyst.
    #[error(transparent)]
    Store(#[from] wardcast_store::StoreError),
    /// A contract document could not be built or read.
    #[error(transparent)]
    Contract(#[from] wardcast_contract::ContractError),
    /// Anything else that went wrong inside the server.
    #[error("internal error: {0}")]
    Internal(String),
}

/// Result alias for the server.
pub type Result<T> = std::result::Result<T, ServerError>;

impl ServerError {
    /// The HTTP status for this error.
    pub fn status(&self) -> StatusCode {
        match self {
            ServerError::BadRequest(_) => StatusCode::BAD_REQUEST,
            ServerError::NotFound(_) => StatusCode::NOT_FOUND,
            ServerError::Forbidden(_) => StatusCode::FORBIDDEN,
            ServerError::Timeout => StatusCode::REQUEST_TIMEOUT,
            ServerError::TooLarge => StatusCode::PAYLOAD_TOO_LARGE,
            ServerError::Engine(_) | ServerError::Contract(_) | ServerError::Store(_) => {
                StatusCode::UNPROCESSABLE_ENTITY
            }
            ServerError::Bind { .. }
            | ServerError::Serve(_)
            | ServerError::NoLanAddress(_)
            | ServerError::Random(_)
            | ServerError::Render(_)
            | ServerError::Internal(_) => StatusCode::INTERNAL_SERVER_ERROR,
        }
    }

    /// The sentence shown to the person at the browser. Server-side faults get a generic
    /// sentence; the detail goes to the log only.
    pub fn public_message(&self) -> String {
        if self.status().is_server_error() {
            tracing::error!(error = %self, "request failed");
            "Something went wrong inside wardcast while preparing this page. \
             The details are in the terminal where wardcast runs."
                .to_owned()
        } else {
            self.to_string()
        }
    }
}

/// Escapes text for inclusion in HTML (element content or a quoted attribute), with the same
/// numeric character references the templates use.
pub(crate) fn escape_html(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&#38;"),
            '<' => out.push_str("&#60;"),
            '>' => out.push_str("&#62;"),
            '"' => out.push_str("&#34;"),
            '\'' => out.push_str("&#39;"),
            other => out.push(other),
        }
    }
    out
}

/// A minimal, self-contained error page. It does not go through the template engine, so it
/// still works when a template is what failed.
pub(crate) fn error_page(status: StatusCode, message: &str) -> Response {
    let title = status.canonical_reason().unwrap_or("Error");
    let body = format!(
        "<!doctype html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>{title} · wardcast</title><link rel=\"stylesheet\" href=\"/assets/style.css\"></head>\
         <body class=\"bare\"><main class=\"notice\"><p class=\"notice-code\">{code}</p>\
         <h1>{title}</h1><p>{message}</p><p><a href=\"/\">Back to the start</a></p></main></body></html>\n",
        code = status.as_u16(),
        title = escape_html(title),
        message = escape_html(message),
    );
    let mut response = (status, body).into_response();
    response.headers_mut().insert(header::CONTENT_TYPE, HeaderValue::from_static("text/html; charset=utf-8"));
    response
}

impl IntoResponse for ServerError {
    fn into_response(self) -> Response {
        error_page(self.status(), &self.public_message())
    }
}

/// The same errors, written as JSON for the `/api/…` routes: `{"error": "...", "status": 400}`.
#[derive(Debug)]
pub struct ApiError(pub ServerError);

impl<E: Into<ServerError>> From<E> for ApiError {
    fn from(e: E) -> Self {
        ApiError(e.into())
    }
}

impl IntoResponse for ApiError {
    fn into_response(self) -> Response {
        let status = self.0.status();
        let body = serde_json::json!({ "error": self.0.public_message(), "status": status.as_u16() });
        (status, axum::Json(body)).into_response()
    }
}

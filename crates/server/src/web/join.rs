//! Joining a shared session: the link's token is exchanged for a session cookie in two steps.
//!
//! `GET /join?t=…` only shows a page with a "continue" button; it changes nothing. The button
//! POSTs the token from a hidden field, same-origin, and the answer sets an HttpOnly,
//! SameSite=Strict cookie and redirects (303) to the start page, so the token leaves the
//! address bar. The extra step is needed because a link opened from mail or chat is a
//! cross-site navigation, on which a SameSite=Strict cookie would not be sent; the redirect
//! that follows a same-origin POST is same-site, so the new cookie is.

use askama::Template;
use axum::body::Body;
use axum::extract::rejection::QueryRejection;
use axum::extract::{Query, Request, State};
use axum::http::{HeaderValue, header};
use axum::response::Response;

use super::Ctx;
use super::forms::{self, FormReading};
use super::pages::{Layout, render};
use crate::error::{Result, ServerError};
use crate::security::Security;

/// How the join form is read: a token field is 66 bytes, so 4 KiB is plenty.
const JOIN_FORM: FormReading = FormReading {
    limit: 4096,
    not_a_form: "The joining form must be sent as a web form.",
    unreadable: NO_TOKEN_FIELD,
};

/// Said when the join form carries no readable token.
const NO_TOKEN_FIELD: &str = "The joining form has no token field.";

fn no_token_field() -> ServerError {
    ServerError::BadRequest(NO_TOKEN_FIELD.into())
}

/// The continue page.
#[derive(Debug, Template)]
#[template(path = "join.html")]
pub struct JoinPage {
    /// The frame.
    pub layout: Layout,
    /// The token to send back (already checked).
    pub token: String,
}

#[derive(Debug, serde::Deserialize)]
pub(crate) struct JoinQuery {
    t: Option<String>,
}

fn not_sharing() -> ServerError {
    ServerError::NotFound(
        "This wardcast is not shared, so there is nothing to join. Open the start page instead.".into(),
    )
}

fn bad_link() -> ServerError {
    ServerError::Forbidden(
        "This joining link is not valid. Ask the person running wardcast for the link it printed when it started."
            .into(),
    )
}

fn no_store(mut response: Response) -> Response {
    response.headers_mut().insert(header::CACHE_CONTROL, HeaderValue::from_static("no-store"));
    response
}

/// `GET /join?t=…`: shows the continue page when the token is valid. Changes no state.
pub async fn show(
    State(ctx): State<Ctx>,
    query: std::result::Result<Query<JoinQuery>, QueryRejection>,
) -> Result<Response> {
    if !ctx.security.config().is_shared() {
        return Err(not_sharing());
    }
    let token = query.ok().and_then(|Query(q)| q.t).filter(|t| !t.is_empty()).ok_or_else(|| {
        ServerError::BadRequest(
            "The joining link is incomplete: it has no token. Copy the whole link.".into(),
        )
    })?;
    if !ctx.security.token_matches(&token) {
        return Err(bad_link());
    }
    let page = JoinPage { layout: Layout::plain("Join a shared session", true), token };
    Ok(no_store(render(&page)))
}

/// `POST /join` with form field `t`: exchanges a valid token for a session cookie, then
/// redirects to the start page.
pub async fn exchange(State(ctx): State<Ctx>, request: Request<Body>) -> Result<Response> {
    if !ctx.security.config().is_shared() {
        return Err(not_sharing());
    }
    let fields = forms::read(request, JOIN_FORM).await?;
    let token = forms::first(&fields, "t").ok_or_else(no_token_field)?;
    let role = ctx.security.token_role(token).ok_or_else(bad_link)?;
    let session = ctx.security.open_session(role)?;
    let cookie = Security::session_cookie_header(&session)?;
    let mut response = super::see_other("/");
    response.headers_mut().insert(header::SET_COOKIE, cookie);
    Ok(no_store(response))
}

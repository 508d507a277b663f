//! The web app: router, handlers and views, and the function that serves them.
//!
//! Pages work without JavaScript; every page action has a JSON twin under `/api` (listed in
//! docs/API.md). Each page module owns its routes and says them in its own docs:
//!
//! | Module         | Pages                                                          |
//! |----------------|----------------------------------------------------------------|
//! | [`start`]      | `/`: the analyses and tables of the session                    |
//! | [`tables`]     | `/tables…`: upload, validate, join, derive, describe            |
//! | [`setup`]      | `/analyses/{id}/data`: source table, model set-up, refits       |
//! | [`survey`]     | `/analyses/{id}/survey`                                         |
//! | [`effects`]    | `/analyses/{id}`: effects with intervals, fit in words          |
//! | [`soundness`]  | `/analyses/{id}/soundness`: diagnostics                         |
//! | [`contenders`] | `/analyses/{id}/contenders`: model comparison (background jobs) |
//! | [`areas`]      | `/analyses/{id}/areas`: observed against expected              |
//! | [`whatif`]     | `/analyses/{id}/what-if`: scenarios and allocation             |
//! | [`brief`]      | `/analyses/{id}/brief`: the brief and its downloads            |
//! | [`jobs`]       | `/jobs/{job}`: progress, cancel, result link                   |
//! | [`join`]       | `/join`: sharing, token → session cookie                        |
//!
//! Security (see [`crate::security`]) wraps every route; response headers are set outermost
//! so that refusals, timeouts and 404s carry them too.

mod api;
pub mod areas;
pub mod assets;
pub mod brief;
pub mod contenders;
pub mod demo;
pub mod effects;
mod forms;
pub mod jobs;
mod join;
pub mod pages;
pub mod setup;
pub mod soundness;
mod start;
pub mod state;
pub mod survey;
pub mod tables;
pub mod whatif;
pub mod words;

use std::net::{IpAddr, Ipv4Addr, SocketAddr};
use std::path::PathBuf;
use std::sync::Arc;

use axum::Router;
use axum::body::{Body, Bytes};
use axum::http::{HeaderName, HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use tower::ServiceBuilder;
use tower_http::limit::RequestBodyLimitLayer;
use tower_http::services::ServeDir;
use tower_http::set_header::SetResponseHeaderLayer;
use tower_http::timeout::{RequestBodyTimeoutLayer, TimeoutLayer};

pub use crate::security::DEFAULT_PORT;
pub use state::{Analysis, AnalysisParts, AppState, CheckedModel, ColumnInfo, Extras, Glossary, Source};

use crate::error::{Result, ServerError};
use crate::security::{self, CONTENT_SECURITY_POLICY, Limits, Security, SecurityConfig, Token};

/// The router's state: the workspace and the live security state.
#[derive(Debug, Clone)]
pub struct Ctx {
    app: AppState,
    security: Security,
}

impl Ctx {
    fn shared(&self) -> bool {
        self.security.config().is_shared()
    }

    /// Looks up an analysis: a malformed id is a bad request, an unknown one is not found.
    fn analysis(&self, id: &str) -> Result<Arc<Analysis>> {
        if !state::valid_id(id) {
            return Err(ServerError::BadRequest(
                "An analysis id is made of lowercase letters, digits and hyphens.".into(),
            ));
        }
        self.app.get(id)?.ok_or_else(|| {
            ServerError::NotFound(format!("There is no analysis called {id:?} in this session."))
        })
    }

    /// The workspace.
    pub(crate) fn app(&self) -> &AppState {
        &self.app
    }

    /// Looks up an analysis and makes sure its diagnostics are computed, computing them on the
    /// blocking pool the first time.
    pub(crate) async fn checked(&self, id: &str) -> Result<(Arc<Analysis>, Arc<CheckedModel>)> {
        let analysis = self.analysis(id)?;
        if analysis.checks_ready() {
            let checks = analysis.checks();
            return Ok((analysis, checks));
        }
        let a = analysis.clone();
        let checks = blocking(move || Ok(a.checks())).await?;
        Ok((analysis, checks))
    }
}

/// Runs blocking work (fits, searches, imports, rendering a PDF) on tokio's blocking pool, so
/// no request ever stalls the async runtime.
pub(crate) async fn blocking<T, F>(work: F) -> Result<T>
where
    T: Send + 'static,
    F: FnOnce() -> Result<T> + Send + 'static,
{
    tokio::task::spawn_blocking(work)
        .await
        .map_err(|e| ServerError::Internal(format!("a background computation stopped: {e}")))?
}

/// The router with the assets compiled into the binary. Tests drive it with `oneshot`, no
/// socket.
pub fn router(state: AppState, security: SecurityConfig) -> Router {
    build_router(state, security, None)
}

/// The router serving static assets from the folder `assets` instead (for working on the
/// stylesheet without rebuilding).
pub fn router_with_assets(state: AppState, security: SecurityConfig, assets: PathBuf) -> Router {
    build_router(state, security, Some(assets))
}

fn build_router(state: AppState, security: SecurityConfig, assets: Option<PathBuf>) -> Router {
    let limits = security.limits();
    let security = Security::new(security);
    let ctx = Ctx { app: state, security: security.clone() };
    let routes = Router::new()
        .route("/", get(start::page))
        .route("/analyses/{id}", get(effects::page))
        .route("/join", get(join::show).post(join::exchange))
        .route("/api/analyses", get(api::list))
        .route("/api/analyses/{id}/fit", get(api::fit))
        .merge(tables::routes())
        .merge(setup::routes())
        .merge(survey::routes())
        .merge(soundness::routes())
        .merge(contenders::routes())
        .merge(areas::routes())
        .merge(whatif::routes())
        .merge(brief::routes())
        .merge(jobs::routes())
        .fallback(not_found)
        .with_state(ctx);
    let routes = match assets {
        Some(dir) => routes.nest_service("/assets", ServeDir::new(dir)),
        None => routes.route("/assets/{*name}", get(assets::serve)),
    };
    let header = |name: &'static str, value: &'static str| {
        SetResponseHeaderLayer::overriding(HeaderName::from_static(name), HeaderValue::from_static(value))
    };
    routes.layer(
        ServiceBuilder::new()
            .layer(header("content-security-policy", CONTENT_SECURITY_POLICY))
            .layer(header("x-content-type-options", "nosniff"))
            .layer(header("referrer-policy", "no-referrer"))
            .layer(header("x-frame-options", "DENY"))
            .layer(header("cross-origin-opener-policy", "same-origin"))
            .layer(TimeoutLayer::with_status_code(StatusCode::REQUEST_TIMEOUT, limits.request))
            .layer(axum::middleware::from_fn_with_state(security, security::guard))
            .layer(RequestBodyLimitLayer::new(limits.body_bytes))
            .layer(RequestBodyTimeoutLayer::new(limits.body_idle)),
    )
}

async fn not_found() -> ServerError {
    ServerError::NotFound("There is no page at this address.".into())
}

/// Reads a whole request body up to `limit` bytes, turning a stalled body into 408 and an
/// oversized one into 413.
pub(crate) async fn read_body(body: Body, limit: usize) -> Result<Bytes> {
    axum::body::to_bytes(body, limit).await.map_err(|e| {
        let inner = e.into_inner();
        let mut cause: Option<&(dyn std::error::Error + 'static)> = Some(inner.as_ref());
        while let Some(c) = cause {
            if c.is::<tower_http::timeout::TimeoutError>() {
                return ServerError::Timeout;
            }
            if c.is::<http_body_util::LengthLimitError>() {
                return ServerError::TooLarge;
            }
            cause = c.source();
        }
        ServerError::BadRequest("The request body could not be read.".into())
    })
}

/// How to run the server: the flags of `wardcast serve`.
#[derive(Debug, Clone)]
pub struct ServeConfig {
    /// The port; 0 lets the operating system choose. Default [`DEFAULT_PORT`] (7878).
    pub port: u16,
    /// Where datasets and analyses are kept (`--data-dir`); used once the store is wired in.
    pub data_dir: Option<PathBuf>,
    /// Share on the local network (`--share`) instead of listening on 127.0.0.1 only.
    pub share: bool,
}

/// What the server starts with beyond its flags.
#[derive(Debug, Clone)]
pub struct ServeOptions {
    /// The analyses to start with (e.g. the demo).
    pub state: AppState,
    /// Body size and time limits.
    pub limits: Limits,
    /// A folder to serve static assets from instead of the copies compiled into the binary.
    pub assets_dir: Option<PathBuf>,
    /// The LAN address to share on; found automatically when `None`.
    pub share_address: Option<IpAddr>,
}

impl Default for ServeOptions {
    /// An empty workspace, default limits, the embedded assets, the LAN address found
    /// automatically.
    fn default() -> Self {
        ServeOptions {
            state: AppState::new(),
            limits: Limits::default(),
            assets_dir: None,
            share_address: None,
        }
    }
}

/// Loads the Larkmoor demo into a workspace kept in `store` (when given: the demo table is
/// stored and the saved analyses are re-fitted, see [`demo::demo_state_in_store`]) and serves
/// it; see [`serve_with`].
pub async fn serve(config: ServeConfig, store: Option<wardcast_store::Store>) -> Result<()> {
    let state = match store {
        Some(store) => blocking(move || demo::demo_state_in_store(store)).await?,
        None => blocking(demo::demo_state).await?,
    };
    serve_with(config, ServeOptions { state, ..ServeOptions::default() }).await
}

/// Binds the socket and serves until Ctrl-C. Local mode binds 127.0.0.1; `share` binds the LAN
/// address and prints the joining link with its token.
pub async fn serve_with(config: ServeConfig, options: ServeOptions) -> Result<()> {
    let ip = if config.share {
        match options.share_address {
            Some(a) => a,
            None => security::detect_lan_address()?,
        }
    } else {
        IpAddr::V4(Ipv4Addr::LOCALHOST)
    };
    let wanted = SocketAddr::new(ip, config.port);
    let listener = tokio::net::TcpListener::bind(wanted)
        .await
        .map_err(|source| ServerError::Bind { address: wanted.to_string(), source })?;
    let port = listener.local_addr().map_err(ServerError::Serve)?.port();
    let security = if config.share {
        SecurityConfig::shared(port, ip, Token::generate()?).with_audience_token(Token::generate()?)
    } else {
        SecurityConfig::local(port)
    }
    .with_limits(options.limits);

    if let Some(link) = security.share_link() {
        println!("wardcast is shared on the local network. Open this link, or send it to colleagues:");
        println!();
        println!("    {link}");
        println!();
        if let Some(audience) = security.audience_link() {
            println!("For the meeting audience, this link opens every page read-only:");
            println!();
            println!("    {audience}");
            println!();
        }
        println!("Warning: plain HTTP on a local network can be read by anyone else on that network.");
        println!("Share only on a network you trust, and stop wardcast (Ctrl-C) when the meeting ends.");
    } else {
        println!("wardcast is running at http://127.0.0.1:{port}/ (only this computer can reach it).");
    }
    println!("Press Ctrl-C to stop.");

    let app = build_router(options.state, security, options.assets_dir);
    axum::serve(listener, app)
        .with_graceful_shutdown(async {
            // If the signal handler cannot be installed, run until the process is killed.
            if tokio::signal::ctrl_c().await.is_err() {
                std::future::pending::<()>().await;
            }
        })
        .await
        .map_err(ServerError::Serve)
}

/// A 303 redirect, for form posts that lead back to a page.
pub(crate) fn see_other(location: &'static str) -> Response {
    let mut response = StatusCode::SEE_OTHER.into_response();
    response.headers_mut().insert(header::LOCATION, HeaderValue::from_static(location));
    response
}

/// A 303 redirect to a computed same-site path (e.g. `/analyses/larkmoor-2/soundness`). The
/// path must start with `/` and be a valid header value; anything else redirects to `/`.
pub(crate) fn see_other_to(location: &str) -> Response {
    let mut response = StatusCode::SEE_OTHER.into_response();
    let value = if location.starts_with('/') && !location.starts_with("//") {
        HeaderValue::from_str(location).unwrap_or(HeaderValue::from_static("/"))
    } else {
        HeaderValue::from_static("/")
    };
    response.headers_mut().insert(header::LOCATION, value);
    response
}

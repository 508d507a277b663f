//! Safety on localhost and in a shared meeting: Host allow-list, cross-site checks, the sharing
//! token and session cookie, body limits and response headers.
//!
//! The policy, in the order the guard applies it to every request:
//!
//! 1. **Host allow-list** (against DNS rebinding): the `Host` header must name `localhost`,
//!    `127.0.0.1` or `[::1]` with the server's port, or the shared LAN address when sharing.
//!    Anything else gets 403.
//! 2. **Cross-site protection** on every state-changing method (anything but GET, HEAD and
//!    OPTIONS): a `Sec-Fetch-Site` header must be `same-origin` or `none`, and an `Origin`
//!    header must be `http://` plus an allowed host. A request carrying neither header comes
//!    from a non-browser client (a script using the JSON API) and is let through; browsers
//!    always send at least one of them on a state-changing request.
//! 3. **Sharing** (`--share` only): every request needs a valid session cookie, except the
//!    join step (`/join`) and the static assets. The session is obtained by exchanging the
//!    token from the printed link through a same-origin POST; tokens and sessions are compared
//!    in constant time.
//!
//! 4. **Audience sessions** (`--share` only): the printed audience link carries a second token
//!    whose session is read-only. Any state-changing request from it gets 403, and pages render
//!    in read-only mode (forms that post are hidden; see [`read_only`]).
//!
//! No GET handler anywhere changes state; the token exchange is a POST for that reason.

use std::collections::VecDeque;
use std::fmt;
use std::net::IpAddr;
use std::sync::{Arc, Mutex};
use std::time::Duration;

use axum::body::Body;
use axum::extract::{Request, State};
use axum::http::{HeaderMap, HeaderName, HeaderValue, Method, StatusCode, header};
use axum::middleware::Next;
use axum::response::Response;
use subtle::ConstantTimeEq;

use crate::error::{ServerError, error_page};

/// The port wardcast listens on unless told otherwise.
pub const DEFAULT_PORT: u16 = 7878;

/// The name of the session cookie set after the token exchange in sharing mode.
pub const SESSION_COOKIE: &str = "wardcast_session";

/// The Content-Security-Policy sent with every response: no inline script or style, no
/// plugins, no framing, forms only to this server.
pub const CONTENT_SECURITY_POLICY: &str = "default-src 'self'; script-src 'self'; style-src 'self'; \
img-src 'self' data:; object-src 'none'; frame-ancestors 'none'; base-uri 'none'; form-action 'self'";

/// How many sessions are remembered at once; the oldest is forgotten first.
const MAX_SESSIONS: usize = 256;

/// Size and time limits on requests.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limits {
    /// The largest request body accepted, in bytes (uploads are the large ones).
    pub body_bytes: usize,
    /// How long a request body may stall between two pieces before the request is dropped.
    pub body_idle: Duration,
    /// How long a whole request may take, body and handling included.
    pub request: Duration,
}

impl Default for Limits {
    /// 256 MB bodies, 30 seconds of silence within a body, ten minutes per request.
    fn default() -> Self {
        Limits {
            body_bytes: 256 * 1024 * 1024,
            body_idle: Duration::from_secs(30),
            request: Duration::from_secs(600),
        }
    }
}

/// A 32-byte random secret, shown as 64 hexadecimal digits. Its `Debug` output is redacted.
#[derive(Clone, PartialEq, Eq)]
pub struct Token([u8; 32]);

impl Token {
    /// Draws a fresh token from the operating system's random source.
    pub fn generate() -> Result<Token, ServerError> {
        let mut bytes = [0u8; 32];
        getrandom::fill(&mut bytes).map_err(|e| ServerError::Random(e.to_string()))?;
        Ok(Token(bytes))
    }

    /// Reads a token from its 64 hexadecimal digits; `None` for anything else.
    pub fn from_hex(text: &str) -> Option<Token> {
        let mut bytes = [0u8; 32];
        hex::decode_to_slice(text.trim(), &mut bytes).ok()?;
        Some(Token(bytes))
    }

    /// The token as 64 lowercase hexadecimal digits.
    pub fn to_hex(&self) -> String {
        hex::encode(self.0)
    }

    /// Constant-time comparison with a candidate given as text. Malformed text never matches.
    pub fn matches(&self, candidate: &str) -> bool {
        // Decoding time depends only on the candidate's length, which the sender already knows.
        match Token::from_hex(candidate) {
            Some(other) => bool::from(self.0.ct_eq(&other.0)),
            None => false,
        }
    }
}

impl fmt::Debug for Token {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("Token(…)")
    }
}

/// How the server is reachable and what it lets in.
#[derive(Debug, Clone)]
pub struct SecurityConfig {
    port: u16,
    share: Option<Share>,
    limits: Limits,
}

/// Sharing on the local network: the address shown in the links and the tokens they carry.
#[derive(Debug, Clone)]
struct Share {
    address: IpAddr,
    token: Token,
    audience: Option<Token>,
}

/// What a shared session may do.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Role {
    /// A colleague who works on the analysis: every page and action.
    Analyst,
    /// The meeting audience: every page, read-only.
    Audience,
}

tokio::task_local! {
    static READ_ONLY: bool;
}

/// Whether the request being handled comes from a read-only audience session. Pages use it to
/// hide forms that post; the guard refuses such posts in any case.
pub fn read_only() -> bool {
    READ_ONLY.try_with(|v| *v).unwrap_or(false)
}

impl SecurityConfig {
    /// Local use only: requests must name localhost, 127.0.0.1 or [::1] with this port.
    pub fn local(port: u16) -> Self {
        SecurityConfig { port, share: None, limits: Limits::default() }
    }

    /// Sharing on the local network at `address`, admitting holders of `token`.
    pub fn shared(port: u16, address: IpAddr, token: Token) -> Self {
        SecurityConfig {
            port,
            share: Some(Share { address, token, audience: None }),
            limits: Limits::default(),
        }
    }

    /// Adds the read-only audience token (sharing only; ignored otherwise).
    pub fn with_audience_token(mut self, audience: Token) -> Self {
        if let Some(share) = &mut self.share {
            share.audience = Some(audience);
        }
        self
    }

    /// Replaces the size and time limits.
    pub fn with_limits(mut self, limits: Limits) -> Self {
        self.limits = limits;
        self
    }

    /// The port the server listens on.
    pub fn port(&self) -> u16 {
        self.port
    }

    /// The size and time limits.
    pub fn limits(&self) -> Limits {
        self.limits
    }

    /// Whether the server is shared on the local network.
    pub fn is_shared(&self) -> bool {
        self.share.is_some()
    }

    /// The LAN address when sharing.
    pub fn share_address(&self) -> Option<IpAddr> {
        self.share.as_ref().map(|s| s.address)
    }

    /// The link to hand to colleagues when sharing: `http://<lan>:<port>/join?t=<token>`.
    pub fn share_link(&self) -> Option<String> {
        self.share.as_ref().map(|s| {
            format!(
                "http://{}/join?t={}",
                host_with_port(&s.address.to_string(), s.address.is_ipv6(), self.port),
                s.token.to_hex()
            )
        })
    }

    /// The read-only link for a meeting audience, when sharing with an audience token.
    pub fn audience_link(&self) -> Option<String> {
        self.share.as_ref().and_then(|s| {
            s.audience.as_ref().map(|a| {
                format!(
                    "http://{}/join?t={}",
                    host_with_port(&s.address.to_string(), s.address.is_ipv6(), self.port),
                    a.to_hex()
                )
            })
        })
    }

    /// Every `Host` header value accepted. Port 80 may also be written without the port.
    pub fn allowed_hosts(&self) -> Vec<String> {
        let mut names: Vec<(String, bool)> =
            vec![("localhost".into(), false), ("127.0.0.1".into(), false), ("::1".into(), true)];
        if let Some(share) = &self.share {
            names.push((share.address.to_string(), share.address.is_ipv6()));
        }
        let mut hosts = Vec::new();
        for (name, v6) in names {
            hosts.push(host_with_port(&name, v6, self.port));
            if self.port == 80 {
                hosts.push(if v6 { format!("[{name}]") } else { name });
            }
        }
        hosts
    }

    /// Whether a `Host` value (case-insensitive) is on the allow-list.
    pub fn host_allowed(&self, host: &str) -> bool {
        let host = host.trim().to_ascii_lowercase();
        self.allowed_hosts().contains(&host)
    }

    /// The role a joining token grants, compared in constant time against both tokens.
    fn role_of(&self, candidate: &str) -> Option<Role> {
        let share = self.share.as_ref()?;
        let analyst = share.token.matches(candidate);
        let audience = share.audience.as_ref().is_some_and(|a| a.matches(candidate));
        if analyst {
            Some(Role::Analyst)
        } else if audience {
            Some(Role::Audience)
        } else {
            None
        }
    }
}

fn host_with_port(name: &str, v6: bool, port: u16) -> String {
    if v6 { format!("[{name}]:{port}") } else { format!("{name}:{port}") }
}

/// Live security state shared by the guard and the join handlers: the config plus the sessions
/// handed out so far. Cheap to clone.
#[derive(Debug, Clone)]
pub struct Security {
    config: Arc<SecurityConfig>,
    sessions: Arc<Mutex<VecDeque<(Token, Role)>>>,
}

impl Security {
    /// Wraps a config with an empty session list.
    pub fn new(config: SecurityConfig) -> Self {
        Security { config: Arc::new(config), sessions: Arc::new(Mutex::new(VecDeque::new())) }
    }

    /// The configuration.
    pub fn config(&self) -> &SecurityConfig {
        &self.config
    }

    /// The role a token from a join link or form grants, checked in constant time; `None`
    /// for a wrong token and always when not sharing.
    pub fn token_role(&self, candidate: &str) -> Option<Role> {
        self.config.role_of(candidate)
    }

    /// Checks a token from a join link or form (either role).
    pub fn token_matches(&self, candidate: &str) -> bool {
        self.token_role(candidate).is_some()
    }

    /// Starts a session with `role` and returns its secret value for the cookie.
    pub fn open_session(&self, role: Role) -> Result<Token, ServerError> {
        let session = Token::generate()?;
        let mut sessions =
            self.sessions.lock().map_err(|_| ServerError::Internal("session list poisoned".into()))?;
        if sessions.len() >= MAX_SESSIONS {
            sessions.pop_front();
        }
        sessions.push_back((session.clone(), role));
        Ok(session)
    }

    /// The role of the session the request's cookies carry, if it is known. Every stored
    /// session is compared in constant time, so the time taken does not reveal how close a
    /// guess came.
    pub fn session_role(&self, headers: &HeaderMap) -> Option<Role> {
        let candidate = session_cookie(headers).and_then(|v| Token::from_hex(&v))?;
        let sessions = self.sessions.lock().ok()?;
        let mut found = None;
        for (s, role) in sessions.iter() {
            if bool::from(s.0.ct_eq(&candidate.0)) {
                found = Some(*role);
            }
        }
        found
    }

    /// Whether the request's cookies carry a known session.
    pub fn has_session(&self, headers: &HeaderMap) -> bool {
        self.session_role(headers).is_some()
    }

    /// The `Set-Cookie` value for a new session: HttpOnly, SameSite=Strict, whole site.
    pub fn session_cookie_header(session: &Token) -> Result<HeaderValue, ServerError> {
        let value = format!("{SESSION_COOKIE}={}; Path=/; HttpOnly; SameSite=Strict", session.to_hex());
        HeaderValue::from_str(&value).map_err(|e| ServerError::Internal(e.to_string()))
    }
}

/// Reads the session cookie's value from all `Cookie` headers.
fn session_cookie(headers: &HeaderMap) -> Option<String> {
    headers
        .get_all(header::COOKIE)
        .iter()
        .filter_map(|v| v.to_str().ok())
        .flat_map(|v| v.split(';'))
        .filter_map(|pair| pair.trim().split_once('='))
        .find(|(name, _)| *name == SESSION_COOKIE)
        .map(|(_, value)| value.trim().to_owned())
}

/// The host the request names: the `Host` header, or the URI authority (HTTP/2).
fn request_host(request: &Request) -> Option<String> {
    match request.headers().get(header::HOST) {
        Some(v) => v.to_str().ok().map(str::to_owned),
        None => request.uri().authority().map(|a| a.as_str().to_owned()),
    }
}

/// Whether the method can change state and so needs the cross-site check.
fn is_state_changing(method: &Method) -> bool {
    !matches!(*method, Method::GET | Method::HEAD | Method::OPTIONS)
}

/// The cross-site verdict for a state-changing request; `Err` carries the reason.
///
/// Under `Referrer-Policy: no-referrer` browsers send `Origin: null` with every form POST (Fetch
/// standard, "serializing a request origin"), so a `null` origin is accepted when the browser
/// also says `Sec-Fetch-Site: same-origin`, a header pages cannot set; alone it is refused.
/// (The pages themselves ask for `same-origin` referrers with a meta element, so browsers send
/// their real origin, which also covers plain-HTTP LAN addresses where browsers send no
/// `Sec-Fetch-Site` at all.)
pub fn cross_site_check(config: &SecurityConfig, headers: &HeaderMap) -> Result<(), &'static str> {
    let fetch_site = headers
        .get(HeaderName::from_static("sec-fetch-site"))
        .map(|site| site.to_str().unwrap_or("").trim().to_ascii_lowercase());
    if let Some(site) = &fetch_site
        && site != "same-origin"
        && site != "none"
    {
        return Err("This request came from another site, so it was refused.");
    }
    let vouched = fetch_site.as_deref() == Some("same-origin");
    if let Some(origin) = headers.get(header::ORIGIN) {
        let origin = origin.to_str().unwrap_or("").trim().to_ascii_lowercase();
        let allowed = (vouched && origin == "null")
            || origin.strip_prefix("http://").is_some_and(|host| config.host_allowed(host));
        if !allowed {
            return Err("This request came from a page on another origin, so it was refused.");
        }
    }
    Ok(())
}

/// Paths reachable without a session in sharing mode: the join step and static assets.
fn open_without_session(path: &str) -> bool {
    path == "/join" || path.starts_with("/assets/")
}

fn refuse(message: &str) -> Response {
    error_page(StatusCode::FORBIDDEN, message)
}

/// The guard middleware: Host allow-list, cross-site check and (when sharing) the session check.
pub async fn guard(State(security): State<Security>, request: Request<Body>, next: Next) -> Response {
    let config = security.config();
    let host_ok = request_host(&request).is_some_and(|h| config.host_allowed(&h));
    if !host_ok {
        return refuse(
            "This address is not one wardcast answers to. Use the link wardcast printed when it started.",
        );
    }
    if is_state_changing(request.method())
        && let Err(reason) = cross_site_check(config, request.headers())
    {
        return refuse(reason);
    }
    let mut read_only = false;
    if config.is_shared() && !open_without_session(request.uri().path()) {
        match security.session_role(request.headers()) {
            None => {
                return refuse(
                    "This wardcast session is shared, and this browser has not joined it yet. \
                     Open the link that wardcast printed (or that a colleague sent you) to join.",
                );
            }
            Some(Role::Audience) if is_state_changing(request.method()) => {
                return refuse(
                    "This is the read-only view for the meeting audience, so it cannot change \
                     anything. Ask the analyst for the working link.",
                );
            }
            Some(role) => read_only = role == Role::Audience,
        }
    }
    READ_ONLY.scope(read_only, next.run(request)).await
}

/// Finds this computer's address on the local network, for `--share`.
///
/// Connecting a UDP socket sends no packet; it only asks the operating system which local
/// address it would use to reach a documentation-range address (RFC 5737), which is the
/// address of the default route's interface.
pub fn detect_lan_address() -> Result<IpAddr, ServerError> {
    let socket =
        std::net::UdpSocket::bind(("0.0.0.0", 0)).map_err(|e| ServerError::NoLanAddress(e.to_string()))?;
    socket.connect(("192.0.2.1", 9)).map_err(|e| ServerError::NoLanAddress(e.to_string()))?;
    let address = socket.local_addr().map_err(|e| ServerError::NoLanAddress(e.to_string()))?.ip();
    if address.is_unspecified() || address.is_loopback() {
        return Err(ServerError::NoLanAddress(
            "this computer does not seem to be connected to a network".into(),
        ));
    }
    Ok(address)
}

//! Security: response headers, the Host allow-list, cross-site refusals, the sharing token
//! flow, body limits and timeouts.

use std::time::Duration;

use axum::body::{Body, Bytes};
use axum::http::{Method, Request, StatusCode, header};
use http_body_util::channel::Channel;
use wardcast::security::{CONTENT_SECURITY_POLICY, Limits, SESSION_COOKIE, SecurityConfig, Token};
use wardcast::web::router;

use crate::{
    HOST, LAN, PORT, check, get, header_of, local_app, sample_state, send, shared_app, test_token, text,
};

/// The LAN Host header in sharing tests.
const LAN_HOST: &str = "192.0.2.10:7878";

fn with_host(method: Method, path: &str, host: Option<&str>) -> Request<Body> {
    let mut b = Request::builder().method(method).uri(path);
    if let Some(h) = host {
        b = b.header(header::HOST, h);
    }
    b.body(Body::empty()).expect("request")
}

fn join_post(host: &str) -> axum::http::request::Builder {
    Request::post("/join")
        .header(header::HOST, host)
        .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
}

fn form(token: &str) -> Body {
    Body::from(format!("t={token}"))
}

fn assert_security_headers(response: &axum::http::Response<Body>, what: &str) {
    assert_eq!(header_of(response, "content-security-policy"), CONTENT_SECURITY_POLICY, "CSP on {what}");
    assert_eq!(header_of(response, "x-content-type-options"), "nosniff", "nosniff on {what}");
    assert_eq!(header_of(response, "referrer-policy"), "no-referrer", "referrer policy on {what}");
    assert_eq!(header_of(response, "x-frame-options"), "DENY", "framing on {what}");
}

#[test]
fn the_policy_forbids_inline_script_and_framing() {
    // The CSP is a fixed string; these are the directives the brief of this app requires.
    for directive in [
        "default-src 'self'",
        "script-src 'self'",
        "style-src 'self'",
        "img-src 'self' data:",
        "object-src 'none'",
        "frame-ancestors 'none'",
        "base-uri 'none'",
        "form-action 'self'",
    ] {
        assert!(CONTENT_SECURITY_POLICY.contains(directive), "missing {directive}");
    }
    assert!(!CONTENT_SECURITY_POLICY.contains("unsafe-inline"));
    assert!(!CONTENT_SECURITY_POLICY.contains("unsafe-eval"));
}

#[tokio::test]
async fn every_response_carries_the_security_headers() {
    let app = local_app();
    let cases: Vec<(Request<Body>, StatusCode, &str)> = vec![
        (get("/"), StatusCode::OK, "the start page"),
        (get("/analyses/demo"), StatusCode::OK, "the effects page"),
        (get("/api/analyses"), StatusCode::OK, "the JSON list"),
        (get("/api/analyses/demo/fit"), StatusCode::OK, "the fit document"),
        (get("/assets/style.css"), StatusCode::OK, "the stylesheet"),
        (get("/no/such/page"), StatusCode::NOT_FOUND, "a missing page"),
        (get("/assets/missing.css"), StatusCode::NOT_FOUND, "a missing asset"),
        (with_host(Method::GET, "/", Some("evil.example")), StatusCode::FORBIDDEN, "a refused host"),
        (
            Request::post("/").header(header::HOST, HOST).body(Body::empty()).expect("request"),
            StatusCode::METHOD_NOT_ALLOWED,
            "a wrong method",
        ),
    ];
    for (request, status, what) in cases {
        let response = check(&app, request, status, what).await;
        assert_security_headers(&response, what);
    }
    let shared = shared_app();
    let refused =
        check(&shared, with_host(Method::GET, "/", Some(LAN_HOST)), StatusCode::FORBIDDEN, "no session")
            .await;
    assert_security_headers(&refused, "a sharing refusal");
}

#[tokio::test]
async fn the_stylesheet_is_served_as_css() {
    let response = check(&local_app(), get("/assets/style.css"), StatusCode::OK, "stylesheet").await;
    assert!(header_of(&response, "content-type").starts_with("text/css"));
    assert!(text(response).await.contains("@media print"));
}

#[tokio::test]
async fn only_local_host_names_with_our_port_are_answered() {
    let app = local_app();
    let cases = [
        (Some("127.0.0.1:7878"), StatusCode::OK),
        (Some("localhost:7878"), StatusCode::OK),
        (Some("LOCALHOST:7878"), StatusCode::OK),
        (Some("[::1]:7878"), StatusCode::OK),
        (Some("evil.example"), StatusCode::FORBIDDEN),
        (Some("evil.example:7878"), StatusCode::FORBIDDEN),
        (Some("127.0.0.1:9999"), StatusCode::FORBIDDEN),
        (Some("localhost"), StatusCode::FORBIDDEN),
        (Some("127.0.0.1.evil.example:7878"), StatusCode::FORBIDDEN),
        (Some(LAN_HOST), StatusCode::FORBIDDEN),
        (None, StatusCode::FORBIDDEN),
    ];
    for (host, expected) in cases {
        check(&app, with_host(Method::GET, "/", host), expected, &format!("Host {host:?}")).await;
    }
}

#[tokio::test]
async fn port_80_may_be_left_out_of_the_host() {
    let app = router(sample_state(), SecurityConfig::local(80));
    check(&app, with_host(Method::GET, "/", Some("localhost")), StatusCode::OK, "bare localhost on port 80")
        .await;
    check(&app, with_host(Method::GET, "/", Some("localhost:80")), StatusCode::OK, "localhost:80").await;
}

#[tokio::test]
async fn sharing_adds_the_lan_address_to_the_allowed_hosts() {
    let config = SecurityConfig::shared(PORT, LAN, test_token());
    assert!(config.host_allowed(LAN_HOST));
    assert!(config.host_allowed("localhost:7878"));
    assert!(!config.host_allowed("192.0.2.11:7878"));
    let app = shared_app();
    // Joining works through the LAN address; another address on the LAN is refused.
    let ok = format!("/join?t={}", test_token().to_hex());
    check(&app, with_host(Method::GET, &ok, Some(LAN_HOST)), StatusCode::OK, "LAN host").await;
    check(&app, with_host(Method::GET, &ok, Some("192.0.2.11:7878")), StatusCode::FORBIDDEN, "other host")
        .await;
}

#[tokio::test]
async fn state_changing_requests_from_other_sites_are_refused() {
    let app = shared_app();
    let token = test_token().to_hex();
    // (Sec-Fetch-Site, Origin, expected status): a valid token and form in every case, so
    // only the cross-site check decides.
    let cases = [
        (Some("cross-site"), None, StatusCode::FORBIDDEN),
        (Some("same-site"), None, StatusCode::FORBIDDEN),
        (Some("nonsense"), None, StatusCode::FORBIDDEN),
        (None, Some("http://evil.example"), StatusCode::FORBIDDEN),
        (None, Some("null"), StatusCode::FORBIDDEN),
        (None, Some("https://192.0.2.10:7878"), StatusCode::FORBIDDEN),
        (None, Some("http://192.0.2.10:9999"), StatusCode::FORBIDDEN),
        (Some("same-origin"), Some("http://evil.example"), StatusCode::FORBIDDEN),
        (Some("cross-site"), Some("http://192.0.2.10:7878"), StatusCode::FORBIDDEN),
        (Some("same-origin"), Some("http://192.0.2.10:7878"), StatusCode::SEE_OTHER),
        (Some("none"), None, StatusCode::SEE_OTHER),
        (None, Some("http://192.0.2.10:7878"), StatusCode::SEE_OTHER),
        // A script using the API sends neither header.
        (None, None, StatusCode::SEE_OTHER),
    ];
    for (site, origin, expected) in cases {
        let mut b = join_post(LAN_HOST);
        if let Some(s) = site {
            b = b.header("sec-fetch-site", s);
        }
        if let Some(o) = origin {
            b = b.header(header::ORIGIN, o);
        }
        let response =
            check(&app, b.body(form(&token)).expect("request"), expected, &format!("{site:?} {origin:?}"))
                .await;
        if expected == StatusCode::FORBIDDEN {
            assert!(header_of(&response, "set-cookie").is_empty(), "no session on a refusal");
        }
    }
}

#[tokio::test]
async fn the_cross_site_check_covers_every_route_and_method() {
    let app = local_app();
    for method in [Method::POST, Method::PUT, Method::DELETE, Method::PATCH] {
        for path in ["/", "/analyses/demo", "/api/analyses", "/join"] {
            let request = Request::builder()
                .method(method.clone())
                .uri(path)
                .header(header::HOST, HOST)
                .header("sec-fetch-site", "cross-site")
                .body(Body::empty())
                .expect("request");
            check(&app, request, StatusCode::FORBIDDEN, &format!("{method} {path}")).await;
        }
    }
    // Safe methods are not subject to it: a cross-site GET of a page is an ordinary link.
    let request = Request::get("/")
        .header(header::HOST, HOST)
        .header("sec-fetch-site", "cross-site")
        .body(Body::empty());
    check(&app, request.expect("request"), StatusCode::OK, "cross-site GET").await;
}

#[tokio::test]
async fn joining_exchanges_the_token_for_a_session_cookie() {
    let app = shared_app();
    let token = test_token().to_hex();

    // Without a session every page is refused, and the refusal explains how to join.
    let refused =
        check(&app, with_host(Method::GET, "/", Some(LAN_HOST)), StatusCode::FORBIDDEN, "no session").await;
    assert!(text(refused).await.contains("Open the link"));

    // Step 1: the link shows a continue page with the token in a hidden field of a POST form.
    let link = format!("/join?t={token}");
    let page = check(&app, with_host(Method::GET, &link, Some(LAN_HOST)), StatusCode::OK, "join page").await;
    assert!(header_of(&page, "set-cookie").is_empty(), "showing the join page changes nothing");
    assert_eq!(header_of(&page, "referrer-policy"), "no-referrer");
    assert_eq!(header_of(&page, "cache-control"), "no-store");
    let html = text(page).await;
    assert!(html.contains("<form method=\"post\" action=\"/join\">"));
    assert!(html.contains(&format!("<input type=\"hidden\" name=\"t\" value=\"{token}\">")));
    assert!(html.contains("plain HTTP"), "the page warns that the connection is visible on the LAN");

    // Still no session after the GET: GET never changes state.
    check(&app, with_host(Method::GET, "/", Some(LAN_HOST)), StatusCode::FORBIDDEN, "GET made no session")
        .await;

    // Step 2: the same-origin POST sets the cookie and sends the browser to / with a 303.
    let post = join_post(LAN_HOST)
        .header("sec-fetch-site", "same-origin")
        .header(header::ORIGIN, "http://192.0.2.10:7878")
        .body(form(&token))
        .expect("request");
    let answer = check(&app, post, StatusCode::SEE_OTHER, "token exchange").await;
    assert_eq!(header_of(&answer, "location"), "/");
    let cookie = header_of(&answer, "set-cookie");
    assert!(cookie.starts_with(&format!("{SESSION_COOKIE}=")), "{cookie}");
    for attribute in ["HttpOnly", "SameSite=Strict", "Path=/"] {
        assert!(cookie.contains(attribute), "cookie lacks {attribute}: {cookie}");
    }
    assert!(!cookie.contains(&token), "the session is not the token");
    let pair = cookie.split(';').next().expect("name=value").to_owned();

    // With the cookie, pages open and warn about plain HTTP on the LAN.
    let with_cookie = |path: &str| {
        Request::get(path)
            .header(header::HOST, LAN_HOST)
            .header(header::COOKIE, &pair)
            .body(Body::empty())
            .expect("request")
    };
    let start = check(&app, with_cookie("/"), StatusCode::OK, "start page with session").await;
    let html = text(start).await;
    assert!(html.contains("Shared on the local network"));
    assert!(html.contains("anyone else on the same network can read"));
    check(&app, with_cookie("/analyses/demo"), StatusCode::OK, "effects page with session").await;
    check(&app, with_cookie("/api/analyses/demo/fit"), StatusCode::OK, "API with session").await;

    // The cookie may sit among others.
    let mixed = Request::get("/")
        .header(header::HOST, LAN_HOST)
        .header(header::COOKIE, format!("theme=dark; {pair}; other=1"))
        .body(Body::empty())
        .expect("request");
    check(&app, mixed, StatusCode::OK, "cookie among others").await;
}

#[tokio::test]
async fn bad_sessions_and_tokens_are_refused() {
    let app = shared_app();
    let bad_cookies = [
        format!("{SESSION_COOKIE}={}", "00".repeat(32)),
        format!("{SESSION_COOKIE}={}", test_token().to_hex()),
        format!("{SESSION_COOKIE}=not-hex"),
        format!("{SESSION_COOKIE}="),
        format!("other_cookie={}", "00".repeat(32)),
    ];
    for cookie in bad_cookies {
        let request = Request::get("/")
            .header(header::HOST, LAN_HOST)
            .header(header::COOKIE, &cookie)
            .body(Body::empty())
            .expect("request");
        check(&app, request, StatusCode::FORBIDDEN, &cookie).await;
    }
    let wrong = "cd".repeat(32);
    check(
        &app,
        with_host(Method::GET, &format!("/join?t={wrong}"), Some(LAN_HOST)),
        StatusCode::FORBIDDEN,
        "wrong token link",
    )
    .await;
    check(
        &app,
        with_host(Method::GET, "/join?t=short", Some(LAN_HOST)),
        StatusCode::FORBIDDEN,
        "malformed token link",
    )
    .await;
    let post =
        join_post(LAN_HOST).header("sec-fetch-site", "same-origin").body(form(&wrong)).expect("request");
    let refused = check(&app, post, StatusCode::FORBIDDEN, "wrong token posted").await;
    assert!(header_of(&refused, "set-cookie").is_empty());
}

#[tokio::test]
async fn each_bad_join_request_gets_its_own_answer() {
    let app = shared_app();
    let token = test_token().to_hex();
    // (request, status, phrase in the page)
    let cases: Vec<(Request<Body>, StatusCode, &str)> = vec![
        (with_host(Method::GET, "/join", Some(LAN_HOST)), StatusCode::BAD_REQUEST, "has no token"),
        (with_host(Method::GET, "/join?t=", Some(LAN_HOST)), StatusCode::BAD_REQUEST, "has no token"),
        (
            join_post(LAN_HOST).body(Body::from("x=1")).expect("request"),
            StatusCode::BAD_REQUEST,
            "no token field",
        ),
        (
            Request::post("/join")
                .header(header::HOST, LAN_HOST)
                .header(header::CONTENT_TYPE, "application/json")
                .body(Body::from(format!("{{\"t\":\"{token}\"}}")))
                .expect("request"),
            StatusCode::BAD_REQUEST,
            "sent as a web form",
        ),
        (
            join_post(LAN_HOST).body(Body::from("t=%zz")).expect("request"),
            StatusCode::BAD_REQUEST,
            "no token field",
        ),
        (
            Request::put("/join").header(header::HOST, LAN_HOST).body(Body::empty()).expect("request"),
            StatusCode::METHOD_NOT_ALLOWED,
            "",
        ),
    ];
    for (request, status, phrase) in cases {
        let what = format!("{} {}", request.method(), request.uri());
        let response = check(&app, request, status, &what).await;
        assert!(text(response).await.contains(phrase), "{what} should say {phrase:?}");
    }
}

#[tokio::test]
async fn assets_and_the_join_step_are_open_without_a_session() {
    let app = shared_app();
    check(&app, with_host(Method::GET, "/assets/style.css", Some(LAN_HOST)), StatusCode::OK, "stylesheet")
        .await;
    for path in ["/", "/analyses/demo", "/api/analyses", "/api/analyses/demo/fit", "/joinx", "/join/x"] {
        check(&app, with_host(Method::GET, path, Some(LAN_HOST)), StatusCode::FORBIDDEN, path).await;
    }
}

#[tokio::test]
async fn without_sharing_there_is_nothing_to_join() {
    let app = local_app();
    let token = test_token().to_hex();
    check(&app, get(&format!("/join?t={token}")), StatusCode::NOT_FOUND, "join link").await;
    let post = join_post(HOST).header("sec-fetch-site", "same-origin").body(form(&token)).expect("request");
    let response = check(&app, post, StatusCode::NOT_FOUND, "join post").await;
    assert!(header_of(&response, "set-cookie").is_empty());
}

#[test]
fn tokens_are_random_hex_and_compared_whole() {
    let a = Token::generate().expect("random");
    let b = Token::generate().expect("random");
    assert_ne!(a, b);
    let hex = a.to_hex();
    assert_eq!(hex.len(), 64);
    assert!(hex.bytes().all(|c| c.is_ascii_hexdigit()));
    assert!(a.matches(&hex));
    assert!(a.matches(&hex.to_uppercase()), "hex digits are case-insensitive");
    assert!(!a.matches(&hex[..63]));
    assert!(!a.matches(&format!("{hex}0")));
    assert!(!a.matches(""));
    assert!(!a.matches(&b.to_hex()));
    assert_eq!(format!("{a:?}"), "Token(…)", "the token never appears in logs");
}

#[test]
fn the_share_link_carries_the_lan_address_port_and_token() {
    let config = SecurityConfig::shared(PORT, LAN, test_token());
    assert_eq!(
        config.share_link().expect("link"),
        format!("http://192.0.2.10:7878/join?t={}", "ab".repeat(32))
    );
    let v6: std::net::IpAddr = "fd00::5".parse().expect("address");
    let config = SecurityConfig::shared(8080, v6, test_token());
    assert!(config.share_link().expect("link").starts_with("http://[fd00::5]:8080/join?t="));
    assert!(config.host_allowed("[fd00::5]:8080"));
    assert!(SecurityConfig::local(PORT).share_link().is_none());
}

fn limited(limits: Limits) -> axum::Router {
    router(sample_state(), SecurityConfig::shared(PORT, LAN, test_token()).with_limits(limits))
}

#[tokio::test]
async fn bodies_over_the_limit_are_refused() {
    let app = limited(Limits { body_bytes: 64, ..Limits::default() });
    let big = format!("t={}&pad={}", test_token().to_hex(), "x".repeat(200));
    // A declared length over the limit is refused before the body is read.
    let declared = join_post(LAN_HOST)
        .header(header::CONTENT_LENGTH, big.len())
        .body(Body::from(big.clone()))
        .expect("request");
    check(&app, declared, StatusCode::PAYLOAD_TOO_LARGE, "declared length").await;
    // A streamed body without a declared length is cut off at the limit.
    let (mut tx, body) = Channel::<Bytes, std::convert::Infallible>::new(4);
    tokio::spawn(async move {
        for _ in 0..10 {
            if tx.send_data(Bytes::from_static(&[b'x'; 32])).await.is_err() {
                break;
            }
        }
    });
    let streamed = join_post(LAN_HOST).body(Body::new(body)).expect("request");
    let response = check(&app, streamed, StatusCode::PAYLOAD_TOO_LARGE, "streamed body").await;
    assert!(text(response).await.contains("larger than the limit"));
    // The default limit for uploads is 256 MB.
    assert_eq!(Limits::default().body_bytes, 256 * 1024 * 1024);
}

#[tokio::test]
async fn a_stalled_body_times_out() {
    // The body idles longer than allowed between pieces.
    let app = limited(Limits { body_idle: Duration::from_millis(100), ..Limits::default() });
    let (tx, body) = Channel::<Bytes, std::convert::Infallible>::new(1);
    let request = join_post(LAN_HOST).body(Body::new(body)).expect("request");
    let response =
        tokio::time::timeout(Duration::from_secs(10), send(&app, request)).await.expect("answered in time");
    assert_eq!(response.status(), StatusCode::REQUEST_TIMEOUT);
    drop(tx);

    // The whole request takes longer than allowed.
    let app = limited(Limits { request: Duration::from_millis(100), ..Limits::default() });
    let (tx, body) = Channel::<Bytes, std::convert::Infallible>::new(1);
    let request = join_post(LAN_HOST).body(Body::new(body)).expect("request");
    let response =
        tokio::time::timeout(Duration::from_secs(10), send(&app, request)).await.expect("answered in time");
    assert_eq!(response.status(), StatusCode::REQUEST_TIMEOUT);
    assert_security_headers(&response, "a timeout");
    drop(tx);
}

/// Joins a shared app with `token` and returns the session cookie's `name=value`.
async fn join_with(app: &axum::Router, token: &str) -> String {
    let post = join_post(LAN_HOST)
        .header("sec-fetch-site", "same-origin")
        .header(header::ORIGIN, "http://192.0.2.10:7878")
        .body(form(token))
        .expect("request");
    let answer = check(app, post, StatusCode::SEE_OTHER, "token exchange").await;
    header_of(&answer, "set-cookie").split(';').next().expect("name=value").to_owned()
}

#[tokio::test]
async fn the_audience_link_opens_every_page_read_only() {
    let audience = Token::from_hex(&"cd".repeat(32)).expect("64 hex digits");
    let config = SecurityConfig::shared(PORT, LAN, test_token()).with_audience_token(audience.clone());
    assert_eq!(
        config.audience_link().expect("audience link"),
        format!("http://192.0.2.10:7878/join?t={}", audience.to_hex())
    );
    assert_ne!(config.audience_link(), config.share_link(), "two different links");
    assert!(SecurityConfig::shared(PORT, LAN, test_token()).audience_link().is_none());
    let app = router(sample_state(), config);

    let viewer = join_with(&app, &audience.to_hex()).await;
    let analyst = join_with(&app, &test_token().to_hex()).await;
    let request = |method: Method, path: &str, cookie: &str| {
        Request::builder()
            .method(method)
            .uri(path)
            .header(header::HOST, LAN_HOST)
            .header(header::COOKIE, cookie)
            .header("sec-fetch-site", "same-origin")
            .header(header::ORIGIN, "http://192.0.2.10:7878")
            .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
            .body(Body::from("key=LK-47&reason=arena"))
            .expect("request")
    };

    // The audience reads every page, with the read-only banner and the class that hides
    // posting forms.
    let page =
        check(&app, request(Method::GET, "/analyses/demo", &viewer), StatusCode::OK, "audience GET").await;
    let html = text(page).await;
    assert!(html.contains("<body class=\"read-only\">"));
    assert!(html.contains("Read-only view."));
    check(&app, request(Method::GET, "/api/analyses/demo/fit", &viewer), StatusCode::OK, "audience API GET")
        .await;

    // Any state-changing request from the audience is refused before it reaches a handler,
    // whatever the route.
    for path in ["/analyses/demo/exclude", "/jobs/j1/cancel", "/api/analyses", "/nowhere"] {
        for method in [Method::POST, Method::PUT, Method::DELETE] {
            let refused =
                check(&app, request(method.clone(), path, &viewer), StatusCode::FORBIDDEN, path).await;
            assert!(text(refused).await.contains("read-only view"), "{method} {path}");
        }
    }

    // The analyst's session is not read-only.
    let page =
        check(&app, request(Method::GET, "/analyses/demo", &analyst), StatusCode::OK, "analyst GET").await;
    let html = text(page).await;
    assert!(html.contains("<body>"));
    assert!(!html.contains("Read-only view."));
    let answer = send(&app, request(Method::POST, "/nowhere", &analyst)).await;
    assert_eq!(answer.status(), StatusCode::NOT_FOUND, "an analyst's post reaches the router");
}

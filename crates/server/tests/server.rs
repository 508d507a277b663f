//! The server's one integration test binary: router tests without a socket (security, pages,
//! JSON API) and the wording of numbers and sentences.

/// The test modules, in tests/server/.
mod server {
    mod api;
    mod areas;
    mod brief;
    mod cli;
    mod contenders;
    mod jobs;
    mod pages;
    mod security;
    mod setup;
    mod soundness;
    mod survey;
    mod tables;
    mod whatif;
    mod words;
}

use std::net::{IpAddr, Ipv4Addr};
use std::sync::Arc;

use axum::Router;
use axum::body::Body;
use axum::http::{Request, Response, StatusCode, header};
use http_body_util::BodyExt;
use tower::ServiceExt;
use wardcast::security::{SecurityConfig, Token};
use wardcast::web::{Analysis, AnalysisParts, AppState, ColumnInfo, Glossary, Source, router};
use wardcast_contract::fit::FitDocument;
use wardcast_contract::spec::{ModelSpec, PredictorSpec, TransformSpec};
use wardcast_engine::{Column, Table};

/// The port used by every test router.
pub const PORT: u16 = 7878;
/// The Host header of a well-behaved local request.
pub const HOST: &str = "127.0.0.1:7878";
/// The Origin header of a well-behaved local request.
pub const ORIGIN: &str = "http://127.0.0.1:7878";
/// The LAN address used in sharing tests (a documentation-range address, RFC 5737).
pub const LAN: IpAddr = IpAddr::V4(Ipv4Addr::new(192, 0, 2, 10));
/// The name used to test escaping everywhere user text appears.
pub const NASTY: &str = "<script>\"'&";
/// How that name must appear in HTML.
pub const NASTY_ESCAPED: &str = "&#60;script&#62;&#34;&#39;&#38;";

/// The model of the sample analysis: the demo's assault rate on a plain predictor, a logged
/// one, a categorical one with a chosen reference level, and the column named `odd_column`.
pub fn sample_spec(odd_column: &str) -> ModelSpec {
    let mut spec = ModelSpec::new("assault_rate_per_10k", ["unemployment_pct"]);
    spec.predictors.push(PredictorSpec {
        column: "vacancy_pct".into(),
        transform: Some(TransformSpec::Log),
        reference_level: None,
    });
    spec.predictors.push(PredictorSpec {
        column: "district_type".into(),
        transform: None,
        reference_level: Some("residential".into()),
    });
    spec.predictors.push(PredictorSpec { column: odd_column.into(), transform: None, reference_level: None });
    spec
}

/// The invented demo table with the streetlight column renamed `odd_column` and the first
/// district that the sample model drops (LK-12, missing vacancy) keyed `dropped_key` (a
/// district already keyed `dropped_key` takes LK-12 instead).
pub fn sample_table(odd_column: &str, dropped_key: &str) -> Table {
    let demo = wardcast::demo::larkmoor_table().expect("the demo table loads");
    let keys: Vec<String> = demo
        .keys()
        .iter()
        .map(|k| match k.as_str() {
            "LK-12" => dropped_key.to_owned(),
            k if k == dropped_key => "LK-12".to_owned(),
            k => k.to_owned(),
        })
        .collect();
    let columns: Vec<Column> = demo
        .columns()
        .iter()
        .map(|c| {
            let mut c = c.clone();
            if c.name == "streetlight_outages_per_km" {
                c.name = odd_column.to_owned();
            }
            c
        })
        .collect();
    Table::new(keys, columns).expect("table")
}

/// Labels and units: the demo's, plus the odd column described by its own name.
pub fn sample_glossary(odd_column: &str) -> Glossary {
    Glossary::from_meta("districts", &wardcast::demo::column_meta())
        .with_column(odd_column, ColumnInfo::new(odd_column, None))
}

/// A fitted analysis of the sample table.
pub fn sample_analysis(id: &str, name: &str, odd_column: &str, dropped_key: &str) -> Analysis {
    Analysis::build(AnalysisParts {
        id: id.into(),
        name: name.into(),
        glossary: sample_glossary(odd_column),
        source: Arc::new(Source::bare("Sample districts", sample_table(odd_column, dropped_key))),
        spec: sample_spec(odd_column),
        parent: None,
    })
    .expect("the sample model fits")
}

/// The fit document of the sample analysis, computed without the web layer.
pub fn sample_fit(odd_column: &str, dropped_key: &str) -> FitDocument {
    let fitted =
        wardcast::analysis::Fitted::new(&sample_table(odd_column, dropped_key), &sample_spec(odd_column))
            .expect("the sample model fits");
    fitted.fit_document().expect("document")
}

/// A workspace holding the sample analysis under id `demo`.
pub fn sample_state() -> AppState {
    let state = AppState::new();
    state
        .insert(sample_analysis("demo", "Larkmoor assaults", "streetlight_outages", "LK-33"))
        .expect("insert");
    state
}

/// The sample workspace served locally.
pub fn local_app() -> Router {
    router(sample_state(), SecurityConfig::local(PORT))
}

/// A fixed sharing token, so tests can build links.
pub fn test_token() -> Token {
    Token::from_hex(&"ab".repeat(32)).expect("64 hex digits")
}

/// The sample workspace shared on [`LAN`] with [`test_token`].
pub fn shared_app() -> Router {
    router(sample_state(), SecurityConfig::shared(PORT, LAN, test_token()))
}

/// A GET with the local Host header.
pub fn get(path: &str) -> Request<Body> {
    Request::get(path).header(header::HOST, HOST).body(Body::empty()).expect("request")
}

/// A same-origin POST of `body`, sent as `content_type`, with the local Host header.
pub fn post(path: &str, content_type: &str, body: impl Into<Body>) -> Request<Body> {
    Request::post(path)
        .header(header::HOST, HOST)
        .header(header::ORIGIN, ORIGIN)
        .header(header::CONTENT_TYPE, content_type)
        .body(body.into())
        .expect("request")
}

/// Percent-encodes one component of a form body (letters, digits, `-`, `.` and `_` stay; a
/// space becomes `+`).
pub fn encode(s: &str) -> String {
    s.bytes()
        .map(|b| match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'-' | b'.' | b'_' => (b as char).to_string(),
            b' ' => "+".to_owned(),
            _ => format!("%{b:02X}"),
        })
        .collect()
}

/// A same-origin POST of a JSON document.
pub fn post_json(path: &str, body: &serde_json::Value) -> Request<Body> {
    post(path, "application/json", body.to_string())
}

/// Sends a request and asserts its status (`what` names the case), returning the response.
pub async fn check(app: &Router, request: Request<Body>, status: StatusCode, what: &str) -> Response<Body> {
    let response = send(app, request).await;
    assert_eq!(response.status(), status, "{what}");
    response
}

/// Sends one request through the router.
pub async fn send(app: &Router, request: Request<Body>) -> Response<Body> {
    app.clone().oneshot(request).await.expect("the router never fails")
}

/// Collects a response body as text.
pub async fn text(response: Response<Body>) -> String {
    let bytes = response.into_body().collect().await.expect("body").to_bytes();
    String::from_utf8(bytes.to_vec()).expect("utf-8 body")
}

/// Every `<data value="…">` on a page, in order (empty values left out).
pub fn data_numbers(html: &str) -> Vec<f64> {
    html.split("<data value=\"")
        .skip(1)
        .filter_map(|rest| rest.split('"').next())
        .filter(|v| !v.is_empty())
        .map(|v| v.parse::<f64>().expect("a number in data value"))
        .collect()
}

/// Escapes text the way the templates do, for finding text in a page.
pub fn escape_html(text: &str) -> String {
    text.replace('&', "&#38;")
        .replace('<', "&#60;")
        .replace('>', "&#62;")
        .replace('"', "&#34;")
        .replace('\'', "&#39;")
}

/// A header's value as text, or "" when absent.
pub fn header_of(response: &Response<Body>, name: &str) -> String {
    response.headers().get(name).map(|v| v.to_str().expect("ascii header").to_owned()).unwrap_or_default()
}

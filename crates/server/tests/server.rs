//! The server's one integration test binary: router tests without a socket (security, pages,
//! JSON API) and the wording of numbers and sentences.

/// The test modules, in tests/server/.
mod server {
    mod api;
    mod cli;
    mod pages;
    mod security;
    mod words;
}

use std::net::{IpAddr, Ipv4Addr};

use axum::Router;
use axum::body::Body;
use axum::http::{Request, Response, header};
use http_body_util::BodyExt;
use tower::ServiceExt;
use wardcast::security::{SecurityConfig, Token};
use wardcast::web::{Analysis, AppState, ColumnInfo, Glossary, router};
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::cautions::standing_cautions;
use wardcast_contract::fit::{
    CoefficientDoc, DroppedRowDoc, FitDocument, Interval, LIKELIHOOD_CONVENTION, Likelihood, OverallF,
    SumsOfSquares, TermTest,
};
use wardcast_contract::numbers::Number;
use wardcast_contract::spec::{ModelSpec, PredictorSpec, TransformSpec};

/// The port used by every test router.
pub const PORT: u16 = 7878;
/// The Host header of a well-behaved local request.
pub const HOST: &str = "127.0.0.1:7878";
/// The LAN address used in sharing tests (a documentation-range address, RFC 5737).
pub const LAN: IpAddr = IpAddr::V4(Ipv4Addr::new(192, 0, 2, 10));
/// The name used to test escaping everywhere user text appears.
pub const NASTY: &str = "<script>\"'&";
/// How that name must appear in HTML.
pub const NASTY_ESCAPED: &str = "&#60;script&#62;&#34;&#39;&#38;";

fn coefficient(term: &str, estimate: f64, se: f64, t: f64, p: f64, low: f64, high: f64) -> CoefficientDoc {
    CoefficientDoc {
        term: term.into(),
        estimate,
        std_error: se,
        t_value: Number::Finite(t),
        p_value: Number::Finite(p),
        interval: Interval { level: 0.95, low, high },
    }
}

fn test_row(term: &str, df: usize, ss: f64, f: f64, p: f64) -> TermTest {
    TermTest { term: term.into(), df, sum_sq: ss, f: Number::Finite(f), p_value: Number::Finite(p) }
}

/// A fit document shaped like the demo's: a plain predictor, a logged one, a categorical one
/// and a predictor named by `odd_column`. The figures are invented inputs for the views (they
/// test presentation, not arithmetic); the engine's own tests check the arithmetic.
pub fn sample_fit(odd_column: &str, dropped_key: &str) -> FitDocument {
    let mut spec = ModelSpec::new("assault_rate", ["unemployment_pct"]);
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
    FitDocument {
        schema_version: SCHEMA_VERSION.into(),
        kind: "fit".into(),
        spec,
        rows_used: 62,
        rows_dropped: vec![DroppedRowDoc {
            key: dropped_key.into(),
            reason: "missing value in vacancy_pct".into(),
        }],
        coefficients: vec![
            coefficient("(intercept)", 12.5, 3.1, 4.03, 0.00017, 6.3, 18.7),
            coefficient("unemployment_pct", 2.25, 0.6, 3.75, 0.00042, 1.05, 3.45),
            coefficient("log(vacancy_pct)", 8.0, 2.0, 4.0, 0.00019, 4.0, 12.0),
            coefficient("district_type=centre", -3.5, 1.5, -2.33, 0.023, -6.5, -0.5),
            coefficient("district_type=mixed", 1.2, 0.85, 1.41, 0.16, -0.5, 2.9),
            coefficient(odd_column, 0.5, 0.2, 2.5, 0.015, 0.1, 0.9),
        ],
        covariance: vec![vec![0.0; 6]; 6],
        sums_of_squares: SumsOfSquares {
            basis: "about_mean".into(),
            error: 900.0,
            regression: 2100.0,
            total: 3000.0,
        },
        df_model: 5,
        df_residual: 56,
        mse: 900.0 / 56.0,
        residual_sd: (900.0f64 / 56.0).sqrt(),
        r_squared: 0.7,
        adj_r_squared: 0.673,
        overall_f: OverallF {
            statistic: Number::Finite(26.13),
            df_model: 5,
            df_residual: 56,
            p_value: Number::Finite(1.2e-13),
        },
        sequential_anova: vec![
            test_row("unemployment_pct", 1, 1200.0, 74.7, 1e-11),
            test_row("log(vacancy_pct)", 1, 600.0, 37.3, 1e-7),
            test_row("district_type", 2, 200.0, 6.2, 0.0037),
            test_row(odd_column, 1, 100.0, 6.2, 0.015),
        ],
        partial_f: vec![
            test_row("unemployment_pct", 1, 226.0, 14.06, 0.00042),
            test_row("log(vacancy_pct)", 1, 257.0, 16.0, 0.00019),
            test_row("district_type", 2, 190.0, 5.9, 0.0047),
            test_row(odd_column, 1, 100.0, 6.25, 0.015),
        ],
        likelihood: Likelihood {
            log_likelihood: -170.2,
            aic: 352.4,
            sbc: 365.2,
            convention: LIKELIHOOD_CONVENTION.into(),
        },
        exact_fit: false,
        rows: Vec::new(),
        notes: Vec::new(),
        cautions: standing_cautions(),
    }
}

/// Labels and units like the demo's.
pub fn sample_glossary(odd_column: &str) -> Glossary {
    Glossary::new("districts")
        .with_column(
            "assault_rate",
            ColumnInfo::new("assault rate", Some("assault incidents per 10,000 residents")),
        )
        .with_column("unemployment_pct", ColumnInfo::new("Unemployment", Some("% of labour force")))
        .with_column("vacancy_pct", ColumnInfo::new("Housing vacancy", Some("% of dwellings")))
        .with_column("district_type", ColumnInfo::new("District type", None))
        .with_column(odd_column, ColumnInfo::new(odd_column, None))
}

/// A workspace holding the sample analysis under id `demo`.
pub fn sample_state() -> AppState {
    let state = AppState::new();
    let analysis = Analysis::new(
        "demo",
        "Larkmoor assaults",
        sample_glossary("streetlight_outages"),
        sample_fit("streetlight_outages", "LK-33"),
    )
    .expect("valid id");
    state.insert(analysis).expect("insert");
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

/// Sends one request through the router.
pub async fn send(app: &Router, request: Request<Body>) -> Response<Body> {
    app.clone().oneshot(request).await.expect("the router never fails")
}

/// Collects a response body as text.
pub async fn text(response: Response<Body>) -> String {
    let bytes = response.into_body().collect().await.expect("body").to_bytes();
    String::from_utf8(bytes.to_vec()).expect("utf-8 body")
}

/// A header's value as text, or "" when absent.
pub fn header_of(response: &Response<Body>, name: &str) -> String {
    response.headers().get(name).map(|v| v.to_str().expect("ascii header").to_owned()).unwrap_or_default()
}

//! The JSON API: documents, content types and JSON errors.

use axum::http::StatusCode;
use wardcast_contract::fit::FitDocument;

use crate::{get, header_of, local_app, sample_fit, send, text};

async fn json(path: &str, expected: StatusCode) -> serde_json::Value {
    let response = send(&local_app(), get(path)).await;
    assert_eq!(response.status(), expected, "GET {path}");
    assert_eq!(header_of(&response, "content-type"), "application/json", "GET {path}");
    serde_json::from_str(&text(response).await).expect("valid JSON")
}

#[tokio::test]
async fn the_analysis_list_links_each_page_and_document() {
    let list = json("/api/analyses", StatusCode::OK).await;
    assert_eq!(list["schema_version"], wardcast_contract::SCHEMA_VERSION);
    assert_eq!(list["kind"], "analysis_list");
    let first = &list["analyses"][0];
    assert_eq!(first["id"], "demo");
    assert_eq!(first["name"], "Larkmoor assaults");
    let doc = sample_fit("streetlight_outages", "LK-33");
    assert_eq!(first["response"], "assault_rate_per_10k");
    assert_eq!(first["rows_used"], doc.rows_used);
    assert_eq!(first["page"], "/analyses/demo");
    assert_eq!(first["fit"], "/api/analyses/demo/fit");
}

#[tokio::test]
async fn the_fit_document_is_served_unchanged() {
    let served = json("/api/analyses/demo/fit", StatusCode::OK).await;
    let doc: FitDocument = serde_json::from_value(served).expect("a fit document");
    assert_eq!(doc, sample_fit("streetlight_outages", "LK-33"));
}

#[tokio::test]
async fn api_errors_are_json() {
    let cases = [
        ("/api/analyses/missing/fit", StatusCode::NOT_FOUND, "no analysis called"),
        ("/api/analyses/BAD/fit", StatusCode::BAD_REQUEST, "lowercase letters"),
    ];
    for (path, status, phrase) in cases {
        let body = json(path, status).await;
        assert_eq!(body["status"], status.as_u16());
        assert!(body["error"].as_str().expect("message").contains(phrase), "{path}: {body}");
    }
}

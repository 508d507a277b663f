//! Router tests of the survey routes: statuses, the column choice and each bad request, the
//! numbers against an independent computation and against the JSON API, and escaping.

use std::sync::Arc;

use axum::Router;
use axum::http::StatusCode;
use serde_json::Value;
use wardcast::security::SecurityConfig;
use wardcast::web::{Analysis, AnalysisParts, AppState, Source, router};
use wardcast_contract::dataset::{ColumnMeta, ColumnRole};

use crate::{
    NASTY, NASTY_ESCAPED, PORT, get, header_of, local_app, sample_glossary, sample_spec, sample_table, send,
    text,
};

/// Fetches `path`, checks the status and content type, and returns the body.
pub(crate) async fn fetch(app: &Router, path: &str, expected: StatusCode) -> String {
    let response = send(app, get(path)).await;
    assert_eq!(response.status(), expected, "GET {path}");
    let kind = header_of(&response, "content-type");
    if path.starts_with("/api/") {
        assert_eq!(kind, "application/json", "GET {path}");
    } else {
        assert!(kind.starts_with("text/html"), "GET {path}: {kind}");
    }
    text(response).await
}

/// Fetches a JSON document that must answer 200.
pub(crate) async fn json(app: &Router, path: &str) -> Value {
    serde_json::from_str(&fetch(app, path, StatusCode::OK).await).expect("JSON")
}

/// Every `<data value="…" ATTRS>` of the page whose attributes contain `attrs`, as
/// (attributes, value), in page order. Values are parsed back to `f64`; empty means undefined.
pub(crate) fn data_values(html: &str, attrs: &str) -> Vec<(String, Option<f64>)> {
    let mut out = Vec::new();
    for chunk in html.split("<data value=\"").skip(1) {
        let Some(close) = chunk.find('>') else { continue };
        let head = &chunk[..close];
        let Some(end) = head.find('"') else { continue };
        let (value, rest) = (&head[..end], &head[end + 1..]);
        if rest.contains(attrs) {
            out.push((rest.trim().to_owned(), value.parse::<f64>().ok()));
        }
    }
    out
}

/// The numbers of one column's card: field → value.
fn card_values(html: &str, column_escaped: &str) -> Vec<(String, Option<f64>)> {
    let start = html
        .find(&format!("<article class=\"column-card\" data-column=\"{column_escaped}\">"))
        .expect("card");
    let end = start + html[start..].find("</article>").expect("card end");
    data_values(&html[start..end], "data-field=")
        .into_iter()
        .map(|(attrs, v)| (attrs.trim_start_matches("data-field=\"").trim_end_matches('"').to_owned(), v))
        .collect()
}

/// A JSON number or null as an `f64` option.
fn num(v: &Value) -> Option<f64> {
    v.as_f64()
}

#[tokio::test]
async fn survey_routes_answer_with_their_status() {
    let app = local_app();
    let cases = [
        ("/analyses/demo/survey", StatusCode::OK, "What the table holds"),
        ("/analyses/nothing-here/survey", StatusCode::NOT_FOUND, "no analysis called"),
        ("/analyses/Bad_Id/survey", StatusCode::BAD_REQUEST, "lowercase letters"),
        ("/api/analyses/demo/survey", StatusCode::OK, "\"kind\":\"survey\""),
        ("/api/analyses/nothing-here/survey", StatusCode::NOT_FOUND, "\"status\":404"),
        ("/api/analyses/Bad_Id/survey", StatusCode::BAD_REQUEST, "\"status\":400"),
    ];
    for (path, status, phrase) in cases {
        let body = fetch(&app, path, status).await;
        assert!(body.contains(phrase), "GET {path} should mention {phrase:?}");
    }
}

#[tokio::test]
async fn each_bad_column_choice_is_refused_with_a_reason() {
    let app = local_app();
    let nine: String = [
        "residents",
        "assaults",
        "median_income",
        "unemployment_pct",
        "youth_share_pct",
        "vacancy_pct",
        "alcohol_outlets_per_1k",
        "afterschool_seats_per_100",
        "assault_rate_per_10k",
    ]
    .iter()
    .map(|c| format!("col={c}"))
    .collect::<Vec<_>>()
    .join("&");
    let cases = [
        ("col=no_such_column&col=residents", "no column called \\\"no_such_column\\\""),
        ("col=district_type&col=residents", "holds text"),
        ("col=residents", "between 2 and 8 columns"),
        (nine.as_str(), "between 2 and 8 columns to compare (9 were chosen)"),
        ("cols=residents", "only the parameter \\\"col\\\""),
    ];
    for (query, phrase) in cases {
        for base in ["/analyses/demo/survey", "/api/analyses/demo/survey"] {
            let path = format!("{base}?{query}");
            let body = fetch(&app, &path, StatusCode::BAD_REQUEST).await;
            let phrase =
                if base.starts_with("/api") { phrase.to_owned() } else { phrase.replace("\\\"", "&#34;") };
            assert!(body.contains(&phrase), "GET {path} should say {phrase:?}: {body:.300}");
        }
    }
}

#[tokio::test]
async fn the_model_columns_are_chosen_until_the_analyst_picks_others() {
    let app = local_app();
    let doc = json(&app, "/api/analyses/demo/survey").await;
    // The sample model: the rate on unemployment, log vacancy, district type (text) and the odd column.
    assert_eq!(
        doc["chosen"],
        serde_json::json!(["assault_rate_per_10k", "unemployment_pct", "vacancy_pct", "streetlight_outages"])
    );
    let html = fetch(&app, "/analyses/demo/survey", StatusCode::OK).await;
    assert!(html.contains("<input type=\"checkbox\" name=\"col\" value=\"unemployment_pct\" checked>"));
    assert!(html.contains("<input type=\"checkbox\" name=\"col\" value=\"residents\">"));
    let table = sample_table("streetlight_outages", "LK-33");
    let numeric = table.columns().iter().filter(|c| c.data.is_numeric()).count();
    assert_eq!(numeric, 10);
    assert_eq!(
        html.matches("<svg ").count(),
        numeric + 2,
        "a histogram per numeric column, the matrix, the heat map"
    );
    assert!(html.contains("Read before deciding"), "the cautions panel");

    let path = "/api/analyses/demo/survey?col=residents&col=assaults&col=residents";
    let doc = json(&app, path).await;
    assert_eq!(doc["chosen"], serde_json::json!(["residents", "assaults"]), "repeats count once");
    let html = fetch(&app, "/analyses/demo/survey?col=residents&col=assaults", StatusCode::OK).await;
    assert!(html.contains("<input type=\"checkbox\" name=\"col\" value=\"residents\" checked>"));
    assert!(html.contains("<input type=\"checkbox\" name=\"col\" value=\"unemployment_pct\">"));
    assert!(html.contains("href=\"/api/analyses/demo/survey?col=residents&#38;col=assaults\""));
}

#[tokio::test]
async fn summaries_match_an_independent_computation_and_the_page() {
    let app = local_app();
    let doc = json(&app, "/api/analyses/demo/survey").await;
    let html = fetch(&app, "/analyses/demo/survey", StatusCode::OK).await;
    let table = sample_table("streetlight_outages", "LK-33");
    assert_eq!(doc["rows"], 64);
    let columns = doc["columns"].as_array().expect("columns");
    assert_eq!(columns.len(), table.columns().len());
    for (c, col) in columns.iter().zip(table.columns()) {
        let name = col.name.as_str();
        assert_eq!(c["name"], name);
        let card = card_values(&html, name);
        let on_page = |field: &str| card.iter().find(|(f, _)| f == field).map(|(_, v)| *v);
        assert_eq!(on_page("n"), Some(num(&c["n"])), "{name}: n");
        assert_eq!(on_page("missing"), Some(num(&c["missing"])), "{name}: missing");
        match &col.data {
            wardcast_engine::ColumnData::Numeric(values) => {
                let xs: Vec<f64> = values.iter().flatten().copied().collect();
                let n = xs.len() as f64;
                let mean = xs.iter().sum::<f64>() / n;
                let sd = (xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
                let mut sorted = xs.clone();
                sorted.sort_by(f64::total_cmp);
                // Definition 7: position (n − 1)·p between order statistics.
                let q = |p: f64| {
                    let h = (n - 1.0) * p;
                    let lo = h.floor() as usize;
                    sorted[lo] + (h - lo as f64) * (sorted[(lo + 1).min(sorted.len() - 1)] - sorted[lo])
                };
                assert_eq!(c["kind"], "numeric");
                assert_eq!(c["missing"], values.len() - xs.len(), "{name}");
                let close = |what: &str, got: Option<f64>, want: f64| {
                    let got = got.unwrap_or_else(|| panic!("{name}: {what} missing"));
                    assert!(
                        (got - want).abs() <= 1e-12 * want.abs().max(1.0),
                        "{name}: {what} {got} vs {want}"
                    );
                };
                close("mean", num(&c["mean"]), mean);
                close("sd", num(&c["sd"]), sd);
                let qs = &c["quartiles"];
                for (field, p) in [("min", 0.0), ("q1", 0.25), ("median", 0.5), ("q3", 0.75), ("max", 1.0)] {
                    close(field, num(&qs[field]), q(p));
                }
                // The page carries the JSON's numbers exactly.
                for field in ["mean", "sd"] {
                    assert_eq!(on_page(field), Some(num(&c[field])), "{name}: {field} on the page");
                }
                for field in ["min", "q1", "median", "q3", "max"] {
                    assert_eq!(
                        on_page(&format!("quartiles.{field}")),
                        Some(num(&qs[field])),
                        "{name}: {field} on the page"
                    );
                }
            }
            wardcast_engine::ColumnData::Text(values) => {
                assert_eq!(c["kind"], "text");
                let distinct: std::collections::BTreeSet<&str> =
                    values.iter().flatten().map(String::as_str).collect();
                assert_eq!(c["distinct"], distinct.len(), "{name}");
                let total: u64 = c["levels"]
                    .as_array()
                    .expect("levels")
                    .iter()
                    .map(|l| l["count"].as_u64().expect("count"))
                    .sum();
                assert_eq!(total as usize, values.iter().flatten().count(), "{name}: level counts add up");
            }
        }
    }
}

#[tokio::test]
async fn correlations_use_pairwise_complete_rows_and_say_so() {
    let app = local_app();
    let doc =
        json(&app, "/api/analyses/demo/survey?col=unemployment_pct&col=vacancy_pct&col=residents").await;
    let corr = &doc["correlation"];
    assert_eq!(corr["method"], "pearson_pairwise_complete");
    // The sample table lacks the vacancy share of one district.
    assert_eq!(corr["rows"], serde_json::json!([[64, 63, 64], [63, 63, 63], [64, 63, 64]]));
    assert_eq!(corr["same_rows"], false);
    let table = sample_table("streetlight_outages", "LK-33");
    let column = |name: &str| match &table.column(name).expect("column").data {
        wardcast_engine::ColumnData::Numeric(v) => v.clone(),
        wardcast_engine::ColumnData::Text(_) => panic!("numeric"),
    };
    let (a, b) = (column("unemployment_pct"), column("vacancy_pct"));
    let pairs: Vec<(f64, f64)> = a.iter().zip(&b).filter_map(|(x, y)| Some(((*x)?, (*y)?))).collect();
    let n = pairs.len() as f64;
    let (mx, my) = (pairs.iter().map(|p| p.0).sum::<f64>() / n, pairs.iter().map(|p| p.1).sum::<f64>() / n);
    let sxy: f64 = pairs.iter().map(|(x, y)| (x - mx) * (y - my)).sum();
    let sxx: f64 = pairs.iter().map(|(x, _)| (x - mx).powi(2)).sum();
    let syy: f64 = pairs.iter().map(|(_, y)| (y - my).powi(2)).sum();
    let r = sxy / (sxx.sqrt() * syy.sqrt());
    let got = corr["r"][0][1].as_f64().expect("r");
    assert!((got - r).abs() < 1e-12, "r {got} vs {r}");
    assert_eq!(corr["r"][1][0], corr["r"][0][1]);

    let html = fetch(
        &app,
        "/analyses/demo/survey?col=unemployment_pct&col=vacancy_pct&col=residents",
        StatusCode::OK,
    )
    .await;
    assert!(html.contains("so the counts differ: most pairs use 64"), "the page says the counts differ");
    let on_page = data_values(&html, "data-i=\"0\" data-j=\"1\"");
    assert_eq!(on_page, vec![("data-i=\"0\" data-j=\"1\"".to_owned(), Some(got))]);
    let rows = data_values(&html, "data-rows-i=\"0\" data-rows-j=\"1\"");
    assert_eq!(rows[0].1, Some(63.0));
}

/// A workspace whose table has a column, a district and a level named [`NASTY`], with
/// metadata giving the nasty column a nasty unit.
pub(crate) fn nasty_state() -> AppState {
    let demo = sample_table(NASTY, "LK-33");
    let keys: Vec<String> =
        demo.keys().iter().map(|k| if k == "LK-01" { NASTY.to_owned() } else { k.clone() }).collect();
    let columns = demo
        .columns()
        .iter()
        .map(|c| {
            let mut c = c.clone();
            if let wardcast_engine::ColumnData::Text(values) = &mut c.data
                && c.name == "district_name"
            {
                values[0] = Some(NASTY.to_owned());
            }
            c
        })
        .collect();
    let table = wardcast_engine::Table::new(keys, columns).expect("table");
    let mut source = Source::bare(NASTY, table);
    source.columns = vec![
        ColumnMeta::new("district_name", ColumnRole::Group),
        ColumnMeta { unit: Some(NASTY.into()), ..ColumnMeta::new(NASTY, ColumnRole::Indicator) },
    ];
    let analysis = Analysis::build(AnalysisParts {
        id: "nasty".into(),
        name: NASTY.into(),
        glossary: sample_glossary(NASTY),
        source: Arc::new(source),
        spec: sample_spec(NASTY),
        parent: None,
    })
    .expect("the nasty model fits");
    let state = AppState::new();
    state.insert(analysis).expect("insert");
    state
}

#[tokio::test]
async fn user_text_is_escaped_on_the_survey_page() {
    let app = router(nasty_state(), SecurityConfig::local(PORT));
    let html = fetch(&app, "/analyses/nasty/survey", StatusCode::OK).await;
    assert!(html.contains(NASTY_ESCAPED), "the nasty names appear escaped");
    assert!(!html.contains(NASTY), "no raw nasty text");
    assert!(html.contains(&format!("value=\"{NASTY_ESCAPED}\" checked")), "the checkbox value is escaped");
    // The chosen nasty column goes into the JSON link percent-encoded.
    let path = "/analyses/nasty/survey?col=%3Cscript%3E%22%27%26&col=residents";
    let html = fetch(&app, path, StatusCode::OK).await;
    assert!(!html.contains(NASTY));
    assert!(html.contains("/api/analyses/nasty/survey?col=%3Cscript%3E%22%27%26&#38;col=residents"));
    let doc = json(&app, "/api/analyses/nasty/survey?col=%3Cscript%3E%22%27%26&col=residents").await;
    assert_eq!(doc["chosen"][0], NASTY);
    assert!(!html.contains(" style="), "no inline style");
    assert!(!html.contains("<script"), "no script");
}

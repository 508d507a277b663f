//! The Brief page, its downloads and JSON, and `wardcast brief` with saved analyses and
//! allocation flags: the CLI and the web app write the same brief from the same analysis.

use std::path::Path;
use std::process::{Command, Output};
use std::sync::Arc;

use axum::Router;
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use http_body_util::BodyExt;
use wardcast::cli::allocation::{self, AllocationColumns};
use wardcast::security::SecurityConfig;
use wardcast::web::demo::{DEMO_ID, demo_spec, demo_state};
use wardcast::web::{Analysis, AnalysisParts, AppState, Glossary, Source, router};
use wardcast_contract::cautions::standing_cautions;
use wardcast_contract::dataset::{CvSettings, SavedAnalysis};
use wardcast_contract::fit::FitDocument;
use wardcast_engine::allocation::{AllocationOptions, Basis, BudgetRow, SimulationOptions};
use wardcast_engine::{ColumnData, Table};
use wardcast_report::brief::Limitations;

use crate::{HOST, NASTY, ORIGIN, PORT, encode, get, header_of, post, post_json, send, text};

const QUESTION: &str =
    "Which district conditions go with higher assault rates, for next year's prevention budget?";
const AUTHOR: &str = "R. Analyst";

fn demo_app() -> (AppState, Router) {
    let state = demo_state().expect("the demo loads");
    (state.clone(), router(state, SecurityConfig::local(PORT)))
}

fn post_form(path: &str, body: &str) -> Request<Body> {
    post(path, "application/x-www-form-urlencoded", body.to_owned())
}

/// The table called `name` of a brief's JSON document.
fn brief_table<'a>(brief: &'a serde_json::Value, name: &str) -> &'a serde_json::Value {
    brief["tables"]
        .as_array()
        .expect("tables")
        .iter()
        .find(|t| t["name"] == name)
        .unwrap_or_else(|| panic!("the brief has a {name} table"))
}

async fn set_details(app: &Router, id: &str, question: &str, author: &str) {
    let body = format!("question={}&author={}", encode(question), encode(author));
    let response = send(app, post_form(&format!("/analyses/{id}/brief"), &body)).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    assert_eq!(header_of(&response, "location"), format!("/analyses/{id}/brief"));
}

async fn bytes(response: axum::http::Response<Body>) -> Vec<u8> {
    response.into_body().collect().await.expect("body").to_bytes().to_vec()
}

/// The full-precision values of the `<data>` elements inside the table whose caption starts
/// with `caption`.
fn table_values(html: &str, caption: &str) -> Vec<f64> {
    let start = html.find(&format!("<caption>{caption}")).unwrap_or_else(|| panic!("no table {caption:?}"));
    let end = start + html[start..].find("</table>").expect("table end");
    html[start..end]
        .split("<data value=\"")
        .skip(1)
        .map(|s| s[..s.find('"').expect("quote")].parse::<f64>().expect("a number"))
        .collect()
}

#[tokio::test]
async fn the_brief_page_shows_the_brief_with_cautions_sign_off_and_the_fit_numbers() {
    let (state, app) = demo_app();
    let response = send(&app, get("/analyses/larkmoor/brief")).await;
    assert_eq!(response.status(), StatusCode::OK);
    assert_eq!(header_of(&response, "content-type"), "text/html; charset=utf-8");
    let html = text(response).await;
    // The app's five standing cautions, and the brief's own limitations and sign-off.
    for c in standing_cautions() {
        assert!(html.contains(&format!("id=\"caution-{}\"", c.id)), "standing caution {} missing", c.id);
    }
    for heading in Limitations::REQUIRED {
        assert!(html.contains(heading), "the brief's caution {heading:?} is missing");
    }
    assert!(html.contains("Reviewed for data quality, method and equity"));
    assert!(html.contains("<link rel=\"stylesheet\" href=\"/assets/brief.css\">"));
    assert!(html.contains("<form class=\"brief-form\" method=\"post\" action=\"/analyses/larkmoor/brief\">"));
    assert!(html.contains("No decision question entered yet"), "the preview marks the missing question");
    assert!(!html.contains("<style") && !html.contains("style=") && !html.contains("<script"));
    // Every coefficient on the page equals the fit JSON to the last digit.
    let analysis = state.get(DEMO_ID).expect("lock").expect("demo");
    let fit: &FitDocument = analysis.fit();
    let values = table_values(&html, "Coefficients with");
    let per_row = values.len() / fit.coefficients.len();
    assert!(per_row >= 6, "every coefficient row carries its numbers: {per_row}");
    for (i, c) in fit.coefficients.iter().enumerate() {
        let row = &values[i * per_row..(i + 1) * per_row];
        assert_eq!(row[0], c.estimate, "estimate of {}", c.term);
        assert_eq!(row[1], c.interval.low, "low end of {}", c.term);
        assert_eq!(row[2], c.interval.high, "high end of {}", c.term);
        assert_eq!(row[3], c.std_error, "standard error of {}", c.term);
    }
    let stats = table_values(&html, "Fit statistics");
    assert!(stats.contains(&fit.r_squared) && stats.contains(&fit.adj_r_squared));
}

#[tokio::test]
async fn downloads_are_attachments_of_the_right_type_once_question_and_author_are_set() {
    let (_, app) = demo_app();
    // (path, content type, file name, how the file begins)
    let cases: [(&str, &str, &str, &[u8]); 4] = [
        ("/analyses/larkmoor/brief.pdf", "application/pdf", "larkmoor-brief.pdf", b"%PDF-"),
        (
            "/analyses/larkmoor/brief.html",
            "text/html; charset=utf-8",
            "larkmoor-brief.html",
            b"<!DOCTYPE html>",
        ),
        ("/analyses/larkmoor/tables.csv", "text/csv; charset=utf-8", "larkmoor-tables.csv", b"table,"),
        (
            "/analyses/larkmoor/tables.xlsx",
            "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
            "larkmoor-tables.xlsx",
            b"PK",
        ),
    ];
    for (path, ..) in cases {
        let response = send(&app, get(path)).await;
        assert_eq!(response.status(), StatusCode::BAD_REQUEST, "{path} before the question is entered");
        assert!(text(response).await.contains("decision question"), "{path} says what is missing");
    }
    set_details(&app, "larkmoor", QUESTION, AUTHOR).await;
    for (path, content_type, file, magic) in cases {
        let response = send(&app, get(path)).await;
        assert_eq!(response.status(), StatusCode::OK, "{path}");
        assert_eq!(header_of(&response, "content-type"), content_type, "{path}");
        assert_eq!(header_of(&response, "content-disposition"), format!("attachment; filename=\"{file}\""));
        assert_eq!(header_of(&response, "x-content-type-options"), "nosniff");
        let body = bytes(response).await;
        assert!(body.starts_with(magic), "{path} begins with {:?}", String::from_utf8_lossy(magic));
        assert!(body.len() > 1000, "{path} is implausibly small");
        if path.ends_with(".html") {
            let html = String::from_utf8(body).expect("utf-8");
            assert!(html.contains("next year&#39;s prevention budget"), "the question is in the brief");
            assert!(html.contains(AUTHOR));
            // Self-contained: embedded CSS and SVG, no request leaves the file.
            assert!(html.contains("<style>") && html.contains("<svg"));
            for bad in ["src=\"http", "href=\"http", "src=\"/", "href=\"/", "@import", "url(http"] {
                assert!(!html.contains(bad), "the HTML brief makes an external request: {bad}");
            }
            assert!(html.contains("@page") && html.contains("@media print"), "print stylesheet");
        }
    }
}

#[tokio::test]
async fn the_json_brief_matches_the_fit_and_carries_the_question() {
    let (state, app) = demo_app();
    set_details(&app, "larkmoor", QUESTION, AUTHOR).await;
    let response = send(&app, get("/api/analyses/larkmoor/brief")).await;
    assert_eq!(response.status(), StatusCode::OK);
    let doc: serde_json::Value = serde_json::from_str(&text(response).await).expect("json");
    assert_eq!(doc["kind"], "brief");
    assert_eq!(doc["question"], QUESTION);
    assert_eq!(doc["author"], AUTHOR);
    let ids: Vec<&str> =
        doc["sections"].as_array().expect("sections").iter().filter_map(|s| s["id"].as_str()).collect();
    assert_eq!(
        ids,
        [
            "title",
            "summary",
            "data",
            "model",
            "results",
            "checks",
            "districts",
            "allocation",
            "limitations",
            "sign-off",
            "reproducibility"
        ]
    );
    assert_eq!(doc["cautions"].as_array().map(Vec::len), Some(Limitations::REQUIRED.len()));
    let analysis = state.get(DEMO_ID).expect("lock").expect("demo");
    let coefficients = brief_table(&doc, "coefficients");
    for (row, c) in coefficients["rows"].as_array().expect("rows").iter().zip(&analysis.fit().coefficients) {
        assert_eq!(row[0], c.term.as_str());
        assert_eq!(row[1].as_f64(), Some(c.estimate), "{}", c.term);
        assert_eq!(row[4].as_f64(), Some(c.std_error), "{}", c.term);
    }
    assert_eq!(doc["downloads"]["pdf"], "/analyses/larkmoor/brief.pdf");
}

#[tokio::test]
async fn question_and_author_are_escaped_everywhere() {
    let (_, app) = demo_app();
    set_details(&app, "larkmoor", NASTY, NASTY).await;
    let html = text(send(&app, get("/analyses/larkmoor/brief")).await).await;
    assert!(!html.contains(NASTY), "raw user text on the page");
    assert!(html.contains(crate::NASTY_ESCAPED), "the form shows the text escaped");
    assert!(html.contains("&lt;script&gt;&quot;&#39;&amp;"), "the brief shows the text escaped");
    let file = String::from_utf8(bytes(send(&app, get("/analyses/larkmoor/brief.html")).await).await)
        .expect("utf-8");
    assert!(!file.contains(NASTY) && file.contains("&lt;script&gt;"), "the downloaded brief escapes it");
}

#[tokio::test]
async fn bad_brief_requests_are_refused() {
    let (_, app) = demo_app();
    let long = "q".repeat(wardcast::web::brief::QUESTION_MAX_CHARS + 1);
    // (request, expected status, what the case is)
    let cases: Vec<(Request<Body>, StatusCode, &str)> = vec![
        (get("/analyses/nobody/brief"), StatusCode::NOT_FOUND, "unknown analysis page"),
        (get("/analyses/nobody/brief.pdf"), StatusCode::NOT_FOUND, "unknown analysis PDF"),
        (get("/analyses/nobody/tables.csv"), StatusCode::NOT_FOUND, "unknown analysis CSV"),
        (get("/api/analyses/nobody/brief"), StatusCode::NOT_FOUND, "unknown analysis JSON"),
        (get("/analyses/Bad_Id/brief.html"), StatusCode::BAD_REQUEST, "malformed id"),
        (get("/analyses/larkmoor/brief.docx"), StatusCode::NOT_FOUND, "unknown format"),
        (get("/analyses/larkmoor/tables.ods"), StatusCode::NOT_FOUND, "unknown table format"),
        (
            post_form("/analyses/nobody/brief", "question=x"),
            StatusCode::NOT_FOUND,
            "post to unknown analysis",
        ),
        (
            post_form("/analyses/larkmoor/brief", &format!("question={long}")),
            StatusCode::BAD_REQUEST,
            "too long",
        ),
        (post_form("/analyses/larkmoor/brief", "question=%ZZ"), StatusCode::BAD_REQUEST, "bad escape"),
        (post_form("/analyses/larkmoor/brief", "colour=red"), StatusCode::BAD_REQUEST, "no known field"),
        (post_form("/analyses/larkmoor/brief", "author=a%07b"), StatusCode::BAD_REQUEST, "control character"),
        (
            Request::post("/analyses/larkmoor/brief")
                .header(header::HOST, HOST)
                .header(header::ORIGIN, ORIGIN)
                .header(header::CONTENT_TYPE, "application/json")
                .body(Body::from("{\"question\":\"x\"}"))
                .expect("request"),
            StatusCode::BAD_REQUEST,
            "not a form",
        ),
        (
            Request::post("/analyses/larkmoor/brief")
                .header(header::HOST, HOST)
                .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
                .header("sec-fetch-site", "cross-site")
                .body(Body::from("question=x"))
                .expect("request"),
            StatusCode::FORBIDDEN,
            "cross-site post",
        ),
    ];
    for (request, status, case) in cases {
        let response = send(&app, request).await;
        assert_eq!(response.status(), status, "{case}");
    }
    // A refused post changes nothing.
    let doc: serde_json::Value =
        serde_json::from_str(&text(send(&app, get("/api/analyses/larkmoor/brief")).await).await)
            .expect("json");
    assert!(doc["question"].is_null() && doc["author"].is_null());
}

#[tokio::test]
async fn a_browser_form_post_with_a_null_origin_is_accepted_when_the_browser_vouches_same_origin() {
    // Under Referrer-Policy: no-referrer, Chromium posts forms with `Origin: null` and
    // `Sec-Fetch-Site: same-origin`.
    let (_, app) = demo_app();
    let request = |site: &str| {
        Request::post("/analyses/larkmoor/brief")
            .header(header::HOST, HOST)
            .header(header::ORIGIN, "null")
            .header("sec-fetch-site", site)
            .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
            .body(Body::from("author=A"))
            .expect("request")
    };
    assert_eq!(send(&app, request("same-origin")).await.status(), StatusCode::SEE_OTHER);
    assert_eq!(send(&app, request("cross-site")).await.status(), StatusCode::FORBIDDEN);
    assert_eq!(send(&app, request("none")).await.status(), StatusCode::FORBIDDEN, "null needs same-origin");
    let without = Request::post("/analyses/larkmoor/brief")
        .header(header::HOST, HOST)
        .header(header::ORIGIN, "null")
        .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
        .body(Body::from("author=A"))
        .expect("request");
    assert_eq!(send(&app, without).await.status(), StatusCode::FORBIDDEN, "a null origin alone is refused");
}

/// The demo table with LK-01 keyed as a spreadsheet formula.
fn formula_table(formula: &str) -> Table {
    let demo = wardcast::demo::larkmoor_table().expect("demo");
    let keys =
        demo.keys().iter().map(|k| if k == "LK-01" { formula.to_owned() } else { k.clone() }).collect();
    Table::new(keys, demo.columns().to_vec()).expect("table")
}

#[tokio::test]
async fn area_names_that_look_like_formulas_are_neutralised_in_the_downloads() {
    let formula = "=HYPERLINK(\"http://x\",\"y\")";
    let analysis = Analysis::build(AnalysisParts {
        id: "formulas".into(),
        name: "Formula keys".into(),
        glossary: Glossary::from_meta("districts", &wardcast::demo::column_meta()),
        source: Arc::new(Source::bare("Formula keys", formula_table(formula))),
        spec: demo_spec(),
        parent: None,
    })
    .expect("fits");
    let state = AppState::new();
    state.insert(analysis).expect("insert");
    let app = router(state, SecurityConfig::local(PORT));
    set_details(&app, "formulas", QUESTION, AUTHOR).await;
    let response = send(&app, get("/analyses/formulas/tables.csv")).await;
    assert_eq!(response.status(), StatusCode::OK);
    let csv = text(response).await;
    assert!(csv.contains("'=HYPERLINK"), "the formula is neutralised: a leading quote");
    for line in csv.lines() {
        for field in line.split(',') {
            assert!(!field.trim_start_matches('"').starts_with("=HYPERLINK"), "a live formula: {line}");
        }
    }
    let html = String::from_utf8(bytes(send(&app, get("/analyses/formulas/brief.html")).await).await)
        .expect("utf-8");
    assert!(html.contains("=HYPERLINK(&quot;http://x&quot;"), "escaped in the HTML");
    assert!(!html.contains("href=\"http://x"), "never a live link");
}

fn numeric(table: &Table, name: &str) -> Vec<Option<f64>> {
    match table.column(name).map(|c| &c.data) {
        Some(ColumnData::Numeric(v)) => v.clone(),
        _ => panic!("no numeric column {name}"),
    }
}

#[tokio::test]
async fn an_allocation_run_on_the_analysis_reaches_the_brief_with_amounts_summing_to_the_total() {
    let (state, app) = demo_app();
    let analysis = state.get(DEMO_ID).expect("lock").expect("demo");
    let table = analysis.table();
    let budgets: Vec<BudgetRow> = table
        .keys()
        .iter()
        .zip(numeric(table, "programme_budget"))
        .filter_map(|(k, v)| v.map(|v| BudgetRow { key: k.clone(), amount: v as u64 }))
        .collect();
    let columns = AllocationColumns {
        residents: "residents".into(),
        incidents: "assaults".into(),
        rate_unit: 10_000.0,
    };
    let options = AllocationOptions {
        total: 2_500_000,
        basis: Basis::Expected,
        floor: Some(10_000),
        cap: None,
        simulation: SimulationOptions { draws: 400, seed: 11 },
    };
    let doc = allocation::run(&analysis, &budgets, &columns, &options).expect("allocates");
    assert_eq!(doc.districts.iter().map(|d| d.proposed).sum::<u64>(), 2_500_000);
    analysis.update_extras(|e| e.allocation = Some(doc.clone())).expect("extras");
    set_details(&app, "larkmoor", QUESTION, AUTHOR).await;
    let page = text(send(&app, get("/analyses/larkmoor/brief")).await).await;
    assert!(page.contains("2,500,000 marks"), "the amount and the budget column's currency");
    assert!(page.contains("seed 11"));
    let amounts = {
        let csv = text(send(&app, get("/analyses/larkmoor/tables.csv")).await).await;
        let header = csv.lines().find(|l| l.starts_with("table,")).expect("header").to_owned();
        assert!(header.starts_with("table,"));
        csv.lines().filter(|l| l.starts_with("allocation,")).map(|l| l.to_owned()).collect::<Vec<String>>()
    };
    assert_eq!(amounts.len(), doc.districts.len(), "one allocation row per district");
    let api: serde_json::Value =
        serde_json::from_str(&text(send(&app, get("/api/analyses/larkmoor/brief")).await).await)
            .expect("json");
    let table = brief_table(&api, "allocation");
    let at = table["columns"]
        .as_array()
        .expect("columns")
        .iter()
        .position(|c| c == "Proposed amount")
        .expect("column");
    let total: f64 =
        table["rows"].as_array().expect("rows").iter().map(|r| r[at].as_f64().expect("amount")).sum();
    assert_eq!(total, 2_500_000.0);
    for (row, d) in table["rows"].as_array().expect("rows").iter().zip(&doc.districts) {
        assert_eq!(row[0], d.key.as_str());
        assert_eq!(row[at].as_f64(), Some(d.proposed as f64));
    }
}

#[test]
fn rate_units_are_read_from_units_and_names() {
    use wardcast::cli::allocation::rate_unit_in;
    assert_eq!(rate_unit_in("incidents per 10,000 residents per year"), Some(10_000.0));
    assert_eq!(rate_unit_in("assault_rate_per_10k"), Some(10_000.0));
    assert_eq!(rate_unit_in("per 1000"), Some(1000.0));
    assert_eq!(rate_unit_in("rate"), None);
}

// --- The command line ------------------------------------------------------------------------

fn wardcast(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_wardcast")).args(args).output().expect("the binary runs")
}

fn ok(args: &[&str]) {
    let out = wardcast(args);
    assert!(out.status.success(), "{args:?}: {}", String::from_utf8_lossy(&out.stderr));
}

fn refused(args: &[&str]) -> String {
    let out = wardcast(args);
    assert_eq!(out.status.code(), Some(2), "exit code for {args:?}");
    let err = String::from_utf8(out.stderr).expect("utf-8");
    assert_eq!(err.trim_end().lines().count(), 1, "one line for {args:?}: {err}");
    err
}

const PREDICTORS: &str = "unemployment_pct,vacancy_pct,alcohol_outlets_per_1k";

/// The CSV tables of a brief that do not depend on where the data were read from (the data
/// and checksum tables name the files or store versions).
fn model_tables(csv: &str) -> Vec<String> {
    csv.lines()
        .filter(|l| {
            !l.starts_with("sources,") && !l.starts_with("checksums,") && !l.starts_with("variables,")
        })
        .map(str::to_owned)
        .collect()
}

fn path_str(p: &Path) -> &str {
    p.to_str().expect("utf-8 path")
}

#[test]
fn a_saved_analysis_gives_the_same_brief_as_the_equivalent_flags() {
    let dir = tempfile::tempdir().expect("tempdir");
    let store_dir = dir.path().join("store");
    let (mut store, _) = wardcast_store::Store::open(&store_dir).expect("store");
    let manifest =
        store.save("Larkmoor districts", wardcast::demo::larkmoor_draft().expect("draft")).expect("saved");
    let mut spec = wardcast_contract::spec::ModelSpec::new("assault_rate_per_10k", PREDICTORS.split(','));
    spec.exclusions.push(wardcast_contract::spec::ExclusionSpec {
        key: "LK-47".into(),
        reason: "arena district".into(),
    });
    let saved = store
        .save_analysis(SavedAnalysis {
            schema_version: wardcast_contract::SCHEMA_VERSION.into(),
            id: String::new(),
            title: "Saved brief".into(),
            dataset_version: manifest.version_id.clone(),
            question: QUESTION.into(),
            author: AUTHOR.into(),
            model_spec: spec,
            cv: CvSettings { folds: 10, seeds: vec![77] },
            scenario: serde_json::json!({ "candidates": ["youth_share_pct"] }),
            allocation: serde_json::json!({ "total": 900000, "basis": "population", "floor": 1000, "seed": 5, "draws": 300 }),
            created_unix: 0,
            updated_unix: 0,
        })
        .expect("the analysis is saved");
    let file = dir.path().join("saved.json");
    std::fs::write(&file, serde_json::to_string_pretty(&saved).expect("json")).expect("written");
    let budgets = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo/larkmoor_budgets.csv");
    let by_id = dir.path().join("by-id.csv");
    let by_file = dir.path().join("by-file.csv");
    let by_flags = dir.path().join("by-flags.csv");
    let common = ["--budgets", path_str(&budgets), "--residents", "residents", "--incidents", "assaults"];
    let mut a =
        vec!["brief", "--analysis", &saved.id, "--data-dir", path_str(&store_dir), "--out", path_str(&by_id)];
    a.extend(common);
    ok(&a);
    let mut b = vec![
        "brief",
        "--analysis",
        path_str(&file),
        "--data-dir",
        path_str(&store_dir),
        "--out",
        path_str(&by_file),
    ];
    b.extend(common);
    ok(&b);
    let mut c = vec![
        "brief",
        "--demo",
        "--response",
        "assault_rate_per_10k",
        "--predictors",
        PREDICTORS,
        "--exclude",
        "LK-47=arena district",
        "--candidates",
        "youth_share_pct",
        "--seed",
        "77",
        "--question",
        QUESTION,
        "--author",
        AUTHOR,
        "--budget",
        "900000",
        "--basis",
        "population",
        "--floor",
        "1000",
        "--alloc-seed",
        "5",
        "--draws",
        "300",
        "--out",
        path_str(&by_flags),
    ];
    c.extend(common);
    ok(&c);
    let read = |p: &Path| std::fs::read_to_string(p).expect("written");
    let (id_csv, file_csv, flags_csv) = (read(&by_id), read(&by_file), read(&by_flags));
    assert_eq!(id_csv, file_csv, "the store id and the exported file give the same brief");
    assert_eq!(model_tables(&id_csv), model_tables(&flags_csv), "the saved analysis equals its flags");
    for table in ["coefficients,", "candidates,", "districts,", "allocation,"] {
        assert!(id_csv.lines().any(|l| l.starts_with(table)), "the brief has the {table} table");
    }
    let amounts: u64 = id_csv
        .lines()
        .filter(|l| l.starts_with("allocation,"))
        .map(|l| {
            let cells: Vec<&str> = l.split(',').collect();
            // allocation,<key>,<budget>,<3 shares>,<amount>,<low>,<high>
            cells[6].parse::<f64>().expect("an amount") as u64
        })
        .sum();
    assert_eq!(amounts, 900_000, "amounts sum exactly to the total");
}

#[test]
fn allocation_flags_add_the_allocation_section() {
    let dir = tempfile::tempdir().expect("tempdir");
    let out = dir.path().join("brief.html");
    ok(&[
        "brief",
        "--demo",
        "--response",
        "assault_rate_per_10k",
        "--predictors",
        PREDICTORS,
        "--budget",
        "1000000",
        "--basis",
        "blend",
        "--blend",
        "0.5,0.25,0.25",
        "--cap",
        "60000",
        "--currency",
        "marks",
        "--draws",
        "200",
        "--alloc-seed",
        "9",
        "--out",
        path_str(&out),
    ]);
    let html = std::fs::read_to_string(&out).expect("written");
    let section = &html[html.find("id=\"allocation\"").expect("allocation section")..];
    assert!(section.contains("1,000,000 marks"));
    assert!(section.contains(
        "a blend of population (50%), observed incidents (25%) and model-expected incidents (25%)"
    ));
    assert!(section.contains("Cap per district: 60,000 marks."));
    assert!(section.contains("seed 9"));
    assert!(section.contains("Share: blend"));
    assert!(!html.contains("No scenario or allocation was run"));
}

#[test]
fn bad_brief_command_lines_are_refused_with_one_line() {
    let dir = tempfile::tempdir().expect("tempdir");
    let html = dir.path().join("b.html");
    let out = path_str(&html);
    let model = ["--demo", "--response", "assault_rate_per_10k", "--predictors", PREDICTORS];
    // (extra arguments, a part of the message)
    let cases: Vec<(Vec<&str>, &str)> = vec![
        (vec!["--analysis", "abc", "--demo", "--out", out], "cannot be used with"),
        (vec!["--analysis", "abc", "--predictors", "x", "--out", out], "cannot be used with"),
        (vec!["--analysis", "nope", "--data-dir", path_str(dir.path()), "--out", out], "nope"),
        (
            vec!["--analysis", "missing.json", "--data-dir", path_str(dir.path()), "--out", out],
            "missing.json",
        ),
        ([model.as_slice(), &["--out", "brief.doc"]].concat(), "--out must end in"),
        ([model.as_slice(), &["--floor", "5", "--out", out]].concat(), "--budget"),
        ([model.as_slice(), &["--budget", "100", "--basis", "blend", "--out", out]].concat(), "--blend"),
        ([model.as_slice(), &["--budget", "100", "--basis", "votes", "--out", out]].concat(), "not a basis"),
        ([model.as_slice(), &["--budget", "100", "--floor", "50", "--out", out]].concat(), "floor"),
        (
            vec!["--response", "y", "--predictors", "x", "--question", "q", "--author", "a", "--out", out],
            "--demo",
        ),
    ];
    for (extra, expected) in cases {
        let mut args = vec!["brief"];
        args.extend(extra.iter().copied());
        let message = refused(&args);
        assert!(message.contains(expected), "{args:?}: {message}");
    }
    assert!(!html.exists(), "nothing was written");
}

#[test]
fn the_demo_brief_from_the_command_line_equals_the_web_download() {
    let dir = tempfile::tempdir().expect("tempdir");
    let out = dir.path().join("tables.csv");
    let predictors = demo_spec().predictors.iter().map(|p| p.column.clone()).collect::<Vec<_>>().join(",");
    ok(&[
        "brief",
        "--demo",
        "--response",
        "assault_rate_per_10k",
        "--predictors",
        &predictors,
        "--question",
        QUESTION,
        "--author",
        AUTHOR,
        "--out",
        path_str(&out),
    ]);
    let cli = std::fs::read_to_string(&out).expect("written");
    let web = tokio::runtime::Runtime::new().expect("runtime").block_on(async {
        let (_, app) = demo_app();
        set_details(&app, "larkmoor", QUESTION, AUTHOR).await;
        text(send(&app, get("/analyses/larkmoor/tables.csv")).await).await
    });
    assert_eq!(cli, web, "the command line and the web app write the same tables");
}

fn f(v: &serde_json::Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("{v} is not a number"))
}

/// The numbers of a kept scenario document, in the columns of the brief's scenario table
/// (prediction, mean interval, single-area interval; the all-areas rows have no single-area
/// interval).
fn scenario_numbers(doc: &serde_json::Value) -> Vec<f64> {
    let mut out = Vec::new();
    if !doc["one_area"].is_null() {
        let p = &doc["one_area"]["prediction"];
        out.extend(
            [
                &p["fit"],
                &p["mean_interval"]["low"],
                &p["mean_interval"]["high"],
                &p["new_area_interval"]["low"],
                &p["new_area_interval"]["high"],
            ]
            .map(f),
        );
    }
    if !doc["all_areas"].is_null() {
        let a = &doc["all_areas"]["scenario"];
        out.extend([&a["fit"], &a["interval"]["low"], &a["interval"]["high"]].map(f));
    }
    out
}

#[tokio::test]
async fn kept_scenarios_reach_the_brief_with_the_documents_numbers_and_leave_it_when_forgotten() {
    let (_, app) = demo_app();
    set_details(&app, DEMO_ID, QUESTION, AUTHOR).await;
    let keep = |body: serde_json::Value| post_json(&format!("/api/analyses/{DEMO_ID}/what-if/keep"), &body);
    let response =
        send(&app, keep(serde_json::json!({"area": "LK-20", "values": {"unemployment_pct": 9.5}}))).await;
    assert_eq!(response.status(), StatusCode::CREATED);
    let response = send(
        &app,
        keep(serde_json::json!({"shift": {"column": "unemployment_pct", "operation": "add", "amount": -1}})),
    )
    .await;
    assert_eq!(response.status(), StatusCode::CREATED);
    let kept: Vec<serde_json::Value> = serde_json::from_str(&text(response).await).expect("JSON");
    assert_eq!(kept.len(), 2);

    // The brief JSON: a scenario table whose numbers equal the kept documents'.
    let brief: serde_json::Value =
        serde_json::from_str(&text(send(&app, get(&format!("/api/analyses/{DEMO_ID}/brief"))).await).await)
            .expect("JSON");
    let table = brief_table(&brief, "scenarios");
    let rows = table["rows"].as_array().expect("rows");
    assert_eq!(rows.len(), 2);
    assert!(rows[0][0].as_str().expect("text").starts_with("LK-20 with unemployment 9.5 instead of"));
    for (row, doc) in rows.iter().zip(&kept) {
        let numbers: Vec<f64> =
            row.as_array().expect("cells").iter().filter_map(serde_json::Value::as_f64).collect();
        assert_eq!(numbers, scenario_numbers(doc), "{row}");
    }
    let names: Vec<&str> =
        brief["tables"].as_array().expect("tables").iter().filter_map(|t| t["name"].as_str()).collect();
    let at = |n: &str| names.iter().position(|x| *x == n);
    assert!(at("districts") < at("scenarios"), "the scenarios come after the districts: {names:?}");

    // The Brief page shows the same numbers at full precision, after the districts.
    let page = text(send(&app, get(&format!("/analyses/{DEMO_ID}/brief"))).await).await;
    let shown = table_values(&page, "Kept what-if scenarios");
    let expected: Vec<f64> = kept.iter().flat_map(scenario_numbers).collect();
    assert_eq!(shown, expected);
    assert!(page.contains("are predicted to have the values below"), "non-causal wording");
    assert!(!page.contains("No scenario or allocation was run"));

    // The HTML download prints them as the brief formats them; the CSV carries the rows.
    let html =
        String::from_utf8(bytes(send(&app, get(&format!("/analyses/{DEMO_ID}/brief.html"))).await).await)
            .expect("UTF-8");
    assert!(html.contains("What-if scenarios"));
    for v in &expected {
        let printed = wardcast_report::brief::text::fmt_sig(*v, 4);
        assert!(html.contains(&format!(">{printed}</td>")), "the download prints {printed}");
    }
    let csv = text(send(&app, get(&format!("/analyses/{DEMO_ID}/tables.csv"))).await).await;
    assert_eq!(csv.lines().filter(|l| l.starts_with("scenarios,")).count(), 2, "{csv}");

    // Forgotten, the first leaves the brief.
    let response = send(&app, post_form(&format!("/analyses/{DEMO_ID}/what-if/forget"), "index=0")).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    let brief: serde_json::Value =
        serde_json::from_str(&text(send(&app, get(&format!("/api/analyses/{DEMO_ID}/brief"))).await).await)
            .expect("JSON");
    let table = brief_table(&brief, "scenarios");
    assert_eq!(table["rows"].as_array().expect("rows").len(), 1);
    let response = send(&app, post_form(&format!("/analyses/{DEMO_ID}/what-if/forget"), "index=0")).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    let page = text(send(&app, get(&format!("/analyses/{DEMO_ID}/brief"))).await).await;
    assert!(page.contains("No scenario or allocation was run"), "back to the one-line note");
    assert!(!page.contains("Kept what-if scenarios"));
}

#[tokio::test]
async fn kept_scenario_text_is_escaped_in_the_brief() {
    let state = AppState::new();
    state.insert(crate::sample_analysis("nasty", NASTY, NASTY, "LK-12")).expect("insert");
    let app = router(state, SecurityConfig::local(PORT));
    set_details(&app, "nasty", QUESTION, AUTHOR).await;
    let body = serde_json::json!({"area": "LK-05", "values": {NASTY: 1.5}});
    let response = send(&app, post_json("/api/analyses/nasty/what-if/keep", &body)).await;
    assert_eq!(response.status(), StatusCode::CREATED);
    let page = text(send(&app, get("/analyses/nasty/brief")).await).await;
    assert!(page.contains("Kept what-if scenarios"));
    let html =
        String::from_utf8(bytes(send(&app, get("/analyses/nasty/brief.html")).await).await).expect("UTF-8");
    for (what, doc) in [("page", &page), ("download", &html)] {
        assert!(doc.contains("LK-05 with "), "{what}: the scenario row");
        assert!(!doc.contains(NASTY), "{what}: never raw");
    }
}

//! Router tests of the soundness routes: statuses, the page's numbers against the checks
//! document, the refit comparison against an independent refit, escaping, and the HC3 standard
//! errors on the Effects page.

use std::sync::Arc;

use axum::Router;
use axum::http::StatusCode;
use wardcast::security::SecurityConfig;
use wardcast::web::demo::{DEMO_ID, demo_spec, demo_state};
use wardcast::web::{Analysis, AnalysisParts, AppState, Source, router};
use wardcast_contract::checks::{ChecksDocument, Outcome};
use wardcast_contract::fit::FitDocument;
use wardcast_contract::spec::ExclusionSpec;
use wardcast_engine::Table;

use crate::{
    NASTY, NASTY_ESCAPED, PORT, data_numbers, escape_html, get, header_of, local_app, post, sample_glossary,
    sample_spec, send, text,
};

/// The demo workspace served locally.
fn demo_app() -> Router {
    router(demo_state().expect("the demo loads"), SecurityConfig::local(PORT))
}

/// The demo's checks document, computed without the web layer.
fn demo_checks() -> ChecksDocument {
    let table = wardcast::demo::larkmoor_table().expect("demo table");
    wardcast::analysis::Fitted::new(&table, &demo_spec()).expect("demo fit").checks_document()
}

/// Fetches `path`, checks the status, the content type and that the body contains `needle`;
/// returns the body.
async fn check(app: &Router, path: &str, status: StatusCode, needle: &str) -> String {
    let response = send(app, get(path)).await;
    assert_eq!(response.status(), status, "GET {path}");
    let json = path.starts_with("/api/");
    let content_type = header_of(&response, "content-type");
    if json {
        assert_eq!(content_type, "application/json", "GET {path}");
    } else {
        assert_eq!(content_type, "text/html; charset=utf-8", "GET {path}");
    }
    let body = text(response).await;
    assert!(body.contains(needle), "GET {path} should contain {needle:?}");
    if json && status != StatusCode::OK {
        let v: serde_json::Value = serde_json::from_str(&body).expect("a JSON error");
        assert_eq!(v["status"], status.as_u16(), "GET {path}");
    }
    body
}

/// Whether the page shows `x` in a `<data value>` within 1e-12 (relative to its size, at least 1).
fn shows(values: &[f64], x: f64) -> bool {
    values.iter().any(|v| (v - x).abs() <= 1e-12 * x.abs().max(1.0))
}

fn assert_shows(values: &[f64], x: f64, what: &str) {
    assert!(shows(values, x), "the page shows {what} = {x:?}");
}

/// The part of `html` from `start` to the next occurrence of `end`.
fn between<'a>(html: &'a str, start: &str, end: &str) -> &'a str {
    let from = html.find(start).unwrap_or_else(|| panic!("{start:?} is on the page"));
    let rest = &html[from..];
    &rest[..rest.find(end).unwrap_or(rest.len())]
}

#[tokio::test]
async fn each_route_answers_with_its_status() {
    let app = local_app();
    let long = "K".repeat(201);
    let cases: Vec<(String, StatusCode, &str)> = vec![
        ("/analyses/demo/soundness".into(), StatusCode::OK, "Whether the model&#39;s assumptions hold"),
        ("/analyses/nothing-here/soundness".into(), StatusCode::NOT_FOUND, "no analysis called"),
        (
            "/analyses/Bad_Id/soundness".into(),
            StatusCode::BAD_REQUEST,
            "lowercase letters, digits and hyphens",
        ),
        ("/api/analyses/demo/checks".into(), StatusCode::OK, "\"kind\":\"checks\""),
        ("/api/analyses/nothing-here/checks".into(), StatusCode::NOT_FOUND, "no analysis called"),
        ("/api/analyses/Bad_Id/checks".into(), StatusCode::BAD_REQUEST, "lowercase letters"),
        (
            "/analyses/demo/soundness/without?key=LK-47".into(),
            StatusCode::OK,
            "The model with and without LK-47",
        ),
        ("/analyses/demo/soundness/without".into(), StatusCode::BAD_REQUEST, "Name the area to leave out"),
        (
            "/analyses/demo/soundness/without?key=".into(),
            StatusCode::BAD_REQUEST,
            "Name the area to leave out",
        ),
        ("/analyses/demo/soundness/without?key=%20%20".into(), StatusCode::BAD_REQUEST, "Name the area"),
        (
            "/analyses/demo/soundness/without?key=LK%0A47".into(),
            StatusCode::BAD_REQUEST,
            "control characters",
        ),
        (format!("/analyses/demo/soundness/without?key={long}"), StatusCode::BAD_REQUEST, "at most 200"),
        ("/analyses/demo/soundness/without?key=LK-99".into(), StatusCode::NOT_FOUND, "No area keyed"),
        // The sample model drops the district keyed LK-33 (missing vacancy): it is in the table
        // but not among the rows used, so there is nothing to leave out.
        (
            "/analyses/demo/soundness/without?key=LK-33".into(),
            StatusCode::NOT_FOUND,
            "among the rows this model uses",
        ),
        (
            "/analyses/nothing-here/soundness/without?key=LK-47".into(),
            StatusCode::NOT_FOUND,
            "no analysis called",
        ),
        (
            "/api/analyses/demo/soundness/without?key=LK-47".into(),
            StatusCode::OK,
            "\"kind\":\"refit_without\"",
        ),
        (
            "/api/analyses/demo/soundness/without".into(),
            StatusCode::BAD_REQUEST,
            "Name the area to leave out",
        ),
        ("/api/analyses/demo/soundness/without?key=LK-99".into(), StatusCode::NOT_FOUND, "No area keyed"),
    ];
    for (path, status, needle) in &cases {
        check(&app, path, *status, needle).await;
    }
}

#[tokio::test]
async fn the_api_serves_the_checks_document_as_the_command_line_prints_it() {
    let app = demo_app();
    let body = check(&app, &format!("/api/analyses/{DEMO_ID}/checks"), StatusCode::OK, "checks").await;
    // Compared as text, so the check does not depend on how a JSON reader parses floats.
    assert_eq!(body, serde_json::to_string(&demo_checks()).expect("json"));
}

#[tokio::test]
async fn the_page_shows_the_numbers_of_the_checks_document() {
    let app = demo_app();
    let html =
        check(&app, &format!("/analyses/{DEMO_ID}/soundness"), StatusCode::OK, "The verdicts in brief").await;
    let doc = demo_checks();
    let values = data_numbers(&html);

    // Shapiro-Wilk W and p, beside the quantile chart.
    let Outcome::Ok { result: sw } = &doc.normality.shapiro_wilk else { panic!("Shapiro-Wilk computed") };
    let shapiro = data_numbers(between(&html, "<p class=\"shapiro\">", "</p>"));
    assert_eq!(shapiro, vec![sw.w, sw.p_value], "Shapiro-Wilk W and p exactly");

    // Every VIF and its R², in the VIF table.
    let Outcome::Ok { result: vif } = &doc.collinearity.vif else { panic!("VIFs computed") };
    let table = data_numbers(between(&html, "<table class=\"numbers vif\">", "</table>"));
    let expected: Vec<f64> =
        vif.entries.iter().flat_map(|e| [e.vif.as_f64().expect("finite VIF"), e.r_squared]).collect();
    assert_eq!(table, expected, "the VIF table in document order");

    // LK-47: leverage, Cook's distance, its F percentile, DFFITS, studentized deleted residual.
    let Outcome::Ok { result: inf } = &doc.influence else { panic!("influence computed") };
    let lk47 = inf.rows.iter().find(|r| r.key == "LK-47").expect("LK-47 is a row");
    assert!(lk47.flagged && inf.flagged.contains(&"LK-47".to_owned()));
    let row = data_numbers(between(&html, "<th scope=\"row\">LK-47</th>", "</tr>"));
    let cooks = lk47.cooks_d.as_f64().expect("Cook's D");
    assert_eq!(row[0], lk47.hat, "leverage of LK-47");
    assert_eq!(row[1], cooks, "Cook's distance of LK-47");
    assert_shows(
        &row,
        lk47.cooks_percentile.as_f64().expect("percentile") * 100.0,
        "the F percentile of LK-47",
    );
    assert_eq!(row[3], lk47.dffits.as_f64().expect("DFFITS"), "DFFITS of LK-47");
    assert_eq!(row[4], lk47.studentized_deleted.as_f64().expect("residual"), "residual of LK-47");
    // One flagged row per flagged key, each with its refit link and exclusion form.
    for key in &inf.flagged {
        assert!(html.contains(&format!("<th scope=\"row\">{key}</th>")), "{key} is listed");
        assert!(
            html.contains(&format!("href=\"/analyses/{DEMO_ID}/soundness/without?key={key}\"")),
            "{key} link"
        );
        assert!(
            html.contains(&format!("<input type=\"hidden\" name=\"key\" value=\"{key}\">")),
            "{key} form"
        );
    }
    assert_eq!(html.matches("action=\"/analyses/larkmoor/exclude\"").count(), inf.flagged.len());
    assert_eq!(
        html.matches("<input type=\"hidden\" name=\"then\" value=\"soundness\">").count(),
        inf.flagged.len()
    );
    assert_eq!(html.matches("name=\"reason\" required").count(), inf.flagged.len());

    // Every verdict of the summary is on the page with its statistic and p-value.
    for nv in &doc.summary {
        assert!(html.contains(&escape_html(&nv.verdict.meaning)), "the sentence of {}", nv.check);
        if let Some(s) = nv.verdict.statistic.as_f64() {
            assert_shows(&values, s, &format!("the statistic of {}", nv.check));
        }
        if let Some(p) = nv.verdict.p_value.as_f64() {
            assert_shows(&values, p, &format!("the p-value of {}", nv.check));
        }
    }

    // Added-variable charts: one per predictor term, each with its coefficient.
    for av in &doc.linearity.added_variable {
        let Outcome::Ok { result } = &av.check else { panic!("added-variable plot of {}", av.name) };
        assert_shows(&values, result.coefficient, &format!("the coefficient of {}", av.name));
        assert!(html.contains(&format!("{}, with the other terms taken out", av.name)));
    }
    assert!(html.matches("<svg").count() >= 4 + doc.linearity.added_variable.len(), "the charts are drawn");

    // Condition indices and the transformation search.
    let Outcome::Ok { result: cond } = &doc.collinearity.condition else { panic!("condition computed") };
    for ix in &cond.indices {
        assert_shows(&values, *ix, "a condition index");
    }
    let Outcome::Ok { result: power } = &doc.transformations.response_power else { panic!("Box-Cox") };
    assert_shows(&values, power.lambda_hat, "λ̂");
    let Outcome::Ok { result: search } = &doc.transformations.search else { panic!("search computed") };
    for c in &search.candidates {
        if let Some(rmse) = c.cv_rmse.as_f64() {
            assert_shows(&values, rmse, &format!("the CV RMSE of {}", c.label));
        }
    }
    assert!(html.contains("href=\"/analyses/larkmoor/data\""), "the Data page is linked for transforms");
    assert!(html.contains("never change the model"));

    // The cautions panel and no inline script or style.
    assert!(html.contains("Read before deciding"));
    assert!(!html.contains("<script") && !html.contains("style=") && !html.contains("<style"));
}

/// The demo fit without LK-47, computed independently: the spec excludes the row.
fn independent_refit() -> FitDocument {
    let table = wardcast::demo::larkmoor_table().expect("demo table");
    let mut spec = demo_spec();
    spec.exclusions.push(ExclusionSpec { key: "LK-47".into(), reason: "arena district".into() });
    wardcast::analysis::Fitted::new(&table, &spec).expect("refit").fit_document().expect("document")
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-12 * b.abs().max(1.0)
}

#[tokio::test]
async fn the_comparison_without_lk47_equals_an_independent_refit() {
    let app = demo_app();
    let refit = independent_refit();
    let original =
        wardcast::analysis::Fitted::new(&wardcast::demo::larkmoor_table().expect("table"), &demo_spec())
            .expect("fit")
            .fit_document()
            .expect("document");
    assert_eq!(refit.rows_used + 1, original.rows_used);

    let path = format!("/analyses/{DEMO_ID}/soundness/without?key=LK-47");
    let html = check(&app, &path, StatusCode::OK, "Coefficients side by side").await;
    assert!(html.contains("Read before deciding"), "the cautions panel is on the comparison page");
    for (c, d) in original.coefficients.iter().zip(&refit.coefficients) {
        assert_eq!(c.term, d.term);
        let row = data_numbers(between(&html, &format!("<th scope=\"row\">{}</th>", c.term), "</tr>"));
        let want = [c.estimate, c.interval.low, c.interval.high, d.estimate, d.interval.low, d.interval.high];
        for (i, (got, want)) in row.iter().zip(want).enumerate() {
            assert!(close(*got, want), "{} column {i}: {got} vs {want}", c.term);
        }
        assert!(close(row[6], d.estimate - c.estimate), "{}: the change", c.term);
    }
    let stats = data_numbers(between(&html, "<h2>Fit side by side</h2>", "</table>"));
    let want = [
        original.rows_used as f64,
        refit.rows_used as f64,
        original.r_squared,
        refit.r_squared,
        original.adj_r_squared,
        refit.adj_r_squared,
        original.residual_sd,
        refit.residual_sd,
    ];
    assert_eq!(stats.len(), want.len());
    for (got, want) in stats.iter().zip(want) {
        assert!(close(*got, want), "fit statistic {got} vs {want}");
    }

    // The JSON twin carries the same refit, and nothing was changed.
    let body =
        check(&app, &format!("/api/analyses/{DEMO_ID}/soundness/without?key=LK-47"), StatusCode::OK, "LK-47")
            .await;
    let v: serde_json::Value = serde_json::from_str(&body).expect("json");
    assert_eq!(v["without"]["rows_used"], refit.rows_used);
    for (j, d) in refit.coefficients.iter().enumerate() {
        let got = v["without"]["coefficients"][j]["estimate"].as_f64().expect("estimate");
        assert!(close(got, d.estimate), "JSON estimate of {}", d.term);
    }
    assert!(close(v["without"]["residual_sd"].as_f64().expect("sd"), refit.residual_sd));
    assert_eq!(v["without"]["spec"]["exclusions"][0]["key"], "LK-47");
    let fit = check(&app, &format!("/api/analyses/{DEMO_ID}/fit"), StatusCode::OK, "fit").await;
    assert_eq!(fit, serde_json::to_string(&original).expect("json"), "the analysis is unchanged");
}

/// A workspace whose analysis is named `NASTY`, whose odd predictor column is named `NASTY`
/// and whose arena district LK-47 is keyed `NASTY`.
fn nasty_app() -> Router {
    let base = crate::sample_table(NASTY, "LK-33");
    let keys: Vec<String> =
        base.keys().iter().map(|k| if k == "LK-47" { NASTY.to_owned() } else { k.clone() }).collect();
    let table = Table::new(keys, base.columns().to_vec()).expect("table");
    let analysis = Analysis::build(AnalysisParts {
        id: "nasty".into(),
        name: NASTY.into(),
        glossary: sample_glossary(NASTY),
        source: Arc::new(Source::bare(NASTY, table)),
        spec: sample_spec(NASTY),
        parent: None,
    })
    .expect("the nasty model fits");
    let state = AppState::new();
    state.insert(analysis).expect("insert");
    router(state, SecurityConfig::local(PORT))
}

#[tokio::test]
async fn user_text_is_escaped_on_every_soundness_page() {
    let app = nasty_app();
    let encoded = "%3Cscript%3E%22%27%26";
    for (path, status) in [
        ("/analyses/nasty/soundness".to_owned(), StatusCode::OK),
        (format!("/analyses/nasty/soundness/without?key={encoded}"), StatusCode::OK),
        ("/analyses/nasty/soundness/without?key=%3Cscript%3Ex".to_owned(), StatusCode::NOT_FOUND),
    ] {
        let response = send(&app, get(&path)).await;
        assert_eq!(response.status(), status, "GET {path}");
        let html = text(response).await;
        assert!(!html.contains(NASTY), "{path} contains the raw text");
        assert!(!html.contains("<script"), "{path} contains a script tag");
        if status == StatusCode::OK {
            assert!(html.contains(NASTY_ESCAPED), "{path} shows the escaped text");
        }
    }
    // The flagged key is percent-encoded in the refit link and escaped in the form.
    let html = text(send(&app, get("/analyses/nasty/soundness")).await).await;
    assert!(html.contains(&format!("soundness/without?key={encoded}\"")), "the link encodes the key");
    assert!(html.contains(&format!("name=\"key\" value=\"{NASTY_ESCAPED}\"")), "the form escapes the key");
    // The JSON twin returns the key as data, intact.
    let body =
        text(send(&app, get(&format!("/api/analyses/nasty/soundness/without?key={encoded}"))).await).await;
    let v: serde_json::Value = serde_json::from_str(&body).expect("json");
    assert_eq!(v["key"], NASTY);
}

#[tokio::test]
async fn the_effects_page_shows_the_hc3_errors_of_the_checks_document() {
    let app = demo_app();
    let html = check(&app, &format!("/analyses/{DEMO_ID}"), StatusCode::OK, "HC3 standard error").await;
    let doc = demo_checks();
    let table = wardcast::demo::larkmoor_table().expect("table");
    let fit = wardcast::analysis::Fitted::new(&table, &demo_spec()).expect("fit");
    let fit_doc = fit.fit_document().expect("document");
    let Outcome::Ok { result: robust } = &doc.robust_errors else { panic!("robust errors computed") };
    let q = wardcast_engine::dist::t_isf(0.025, fit_doc.df_residual as f64);
    for (r, c) in robust.coefficients.iter().zip(&fit_doc.coefficients) {
        assert_eq!(r.term, c.term);
        // Each coefficient row: estimate, SE, t, interval, then HC3 SE and HC3 interval.
        let row = data_numbers(between(&html, &format!("<tr><th scope=\"row\">{}</th>", c.term), "</tr>"));
        assert_eq!(row.len(), 8, "{}: eight figures", c.term);
        assert_eq!(row[5], r.hc3, "{}: HC3 exactly as the checks document", c.term);
        assert!(close(row[6], c.estimate - q * r.hc3) && close(row[7], c.estimate + q * r.hc3), "{}", c.term);
        assert!(close(row[1], r.classical), "{}: classical SE agrees with the checks", c.term);
    }
    assert!(html.contains("differ materially"), "the page says when they differ materially");
    assert!(html.contains("MacKinnon &#38; White 1985"));
}

// ---------------------------------------------------------------------------------------------
// The transformation search run again as a background job.

/// Sends a request and reads its JSON answer, checking the status.
async fn json_of(
    app: &Router,
    request: axum::http::Request<axum::body::Body>,
    status: StatusCode,
) -> serde_json::Value {
    let response = send(app, request).await;
    let got = response.status();
    let body = text(response).await;
    assert_eq!(got, status, "{body}");
    serde_json::from_str(&body).expect("JSON")
}

/// Starts a search through the JSON API and returns the job id.
async fn start_transform(app: &Router, analysis: &str, options: &serde_json::Value) -> String {
    let path = format!("/api/analyses/{analysis}/soundness/transform");
    let response = send(app, post(&path, "application/json", options.to_string())).await;
    assert_eq!(response.status(), StatusCode::ACCEPTED);
    let location = header_of(&response, "location");
    let doc: serde_json::Value = serde_json::from_str(&text(response).await).expect("JSON");
    let id = doc["id"].as_str().expect("job id").to_owned();
    assert_eq!(location, format!("/api/jobs/{id}"));
    assert_eq!(doc["result_page"], format!("/analyses/{analysis}/soundness/transform?job={id}"));
    id
}

/// Polls a job until it is no longer running (at most about 60 s) and returns its document.
async fn wait_for(app: &Router, job: &str) -> serde_json::Value {
    for _ in 0..1200 {
        let doc = json_of(app, get(&format!("/api/jobs/{job}")), StatusCode::OK).await;
        if doc["state"] != "running" {
            return doc;
        }
        tokio::time::sleep(std::time::Duration::from_millis(50)).await;
    }
    panic!("job {job} did not stop");
}

/// Asserts two JSON values are equal, numbers to 1e-12 relative (at least 1e-12 absolute).
fn assert_json_close(a: &serde_json::Value, b: &serde_json::Value, at: &str) {
    use serde_json::Value;
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().expect("number"), y.as_f64().expect("number"));
            assert!((x - y).abs() <= 1e-12 * x.abs().max(y.abs()).max(1.0), "{at}: {x} against {y}");
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len(), "{at}: lengths");
            for (i, (p, q)) in x.iter().zip(y).enumerate() {
                assert_json_close(p, q, &format!("{at}[{i}]"));
            }
        }
        (Value::Object(x), Value::Object(y)) => {
            assert_eq!(x.keys().collect::<Vec<_>>(), y.keys().collect::<Vec<_>>(), "{at}: keys");
            for (k, p) in x {
                assert_json_close(p, &y[k], &format!("{at}.{k}"));
            }
        }
        _ => assert_eq!(a, b, "{at}"),
    }
}

/// The search of the demo model run by the engine directly with these settings, as JSON.
fn engine_search(folds: usize, seed: u64, range: (f64, f64), top: usize) -> serde_json::Value {
    use wardcast_engine::diagnostics::{self, CheckOptions, SearchControl};
    let table = wardcast::demo::larkmoor_table().expect("demo table");
    let fitted = wardcast::analysis::Fitted::new(&table, &demo_spec()).expect("demo fit");
    let opts = CheckOptions::default()
        .with_cv_folds(folds)
        .expect("folds")
        .with_cv_seed(seed)
        .with_lambda_range(range.0, range.1)
        .expect("range")
        .with_top_candidates(top)
        .expect("top");
    let outcome =
        diagnostics::transform_search(fitted.fit(), &opts, SearchControl::default()).expect("not cancelled");
    serde_json::to_value(wardcast_contract::checks::SearchDoc::outcome(&outcome)).expect("json")
}

#[tokio::test]
async fn a_transform_job_equals_the_engine_search_and_its_seed_reproduces() {
    let app = demo_app();
    let settings =
        serde_json::json!({"folds": 5, "seed": 42, "lambda_low": -2.5, "lambda_high": 2, "top": 4});
    let first = start_transform(&app, DEMO_ID, &settings).await;
    let doc = wait_for(&app, &first).await;
    assert_eq!(doc["state"], "done", "{doc}");
    assert!(doc["total"].as_u64().expect("total") > 0 && doc["done"] == doc["total"], "{doc}");
    let result = &doc["result"];
    assert_eq!(result["kind"], "transformation_search");
    assert_eq!(result["analysis"], DEMO_ID);
    assert_json_close(&result["settings"], &settings, "settings");
    assert_eq!(result["search"]["status"], "ok");
    assert_eq!(result["search"]["result"]["seed"], 42);
    assert_eq!(result["search"]["result"]["folds"], 5);
    let direct = engine_search(5, 42, (-2.5, 2.0), 4);
    assert_json_close(&result["search"], &direct, "search");
    let candidates = result["search"]["result"]["candidates"].as_array().expect("candidates");
    assert!(candidates.len() > 4);
    assert_eq!(candidates.iter().filter(|c| !c["summary"].is_null()).count(), 4);

    // The same seed reproduces the table; another seed deals other folds.
    let again = wait_for(&app, &start_transform(&app, DEMO_ID, &settings).await).await;
    assert_eq!(again["result"]["search"], result["search"]);
    let other = serde_json::json!({"folds": 5, "seed": 43, "lambda_low": -2.5, "lambda_high": 2, "top": 4});
    let other = wait_for(&app, &start_transform(&app, DEMO_ID, &other).await).await;
    assert_ne!(other["result"]["search"], result["search"]);

    // The result page shows every RMSE and summary of the job in <data value>, the settings and
    // the reminder that the model is not swapped.
    let page = format!("/analyses/{DEMO_ID}/soundness/transform?job={first}");
    let html = check(&app, &page, StatusCode::OK, "never swaps the model").await;
    let values = data_numbers(between(&html, "id=\"search-result\"", "</section>"));
    for c in candidates {
        let label = c["label"].as_str().expect("label");
        assert!(html.contains(label), "the page lists {label}");
        assert_shows(&values, c["cv_rmse"].as_f64().expect("rmse"), label);
        if let Some(s) = c["summary"].as_object() {
            assert_shows(&values, s["r_squared"].as_f64().expect("r2"), "R²");
            for key in ["shapiro_p", "breusch_pagan_p"] {
                if let Some(p) = s[key].as_f64() {
                    assert_shows(&values, p, key);
                }
            }
        }
    }
    for needle in [
        "<dd id=\"setting-folds\">5 folds</dd>",
        "<dd id=\"setting-seed\">42</dd>",
        "href=\"/analyses/larkmoor/data\"",
        "name=\"seed\" min=\"0\" step=\"1\" value=\"42\"",
    ] {
        assert!(html.contains(needle), "the result page has {needle}");
    }
}

#[tokio::test]
async fn the_soundness_form_starts_a_job_whose_defaults_match_the_checks() {
    let app = demo_app();
    // The Soundness page carries the form with the default settings.
    let html = check(&app, &format!("/analyses/{DEMO_ID}/soundness"), StatusCode::OK, "Search again").await;
    assert!(html.contains(&format!("action=\"/analyses/{DEMO_ID}/soundness/transform\"")));
    assert!(
        html.contains("name=\"seed\" min=\"0\" step=\"1\" value=\"20250601\""),
        "the default seed is shown"
    );
    // Posting the defaults (one field left empty) leads to the job page with its progress bar.
    let body = "folds=10&seed=20250601&lambda_low=-3&lambda_high=3&top=";
    let response = send(
        &app,
        post(&format!("/analyses/{DEMO_ID}/soundness/transform"), "application/x-www-form-urlencoded", body),
    )
    .await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    let location = header_of(&response, "location");
    let job = location.strip_prefix("/jobs/").expect("a job page").to_owned();
    let page = text(send(&app, get(&location)).await).await;
    assert!(page.contains("id=\"job-progress\""), "the job page shows progress");
    assert!(page.contains("Transformation search"), "the job page names the search");
    let doc = wait_for(&app, &job).await;
    assert_eq!(doc["state"], "done", "{doc}");
    // At the defaults the job repeats the search inside the checks document.
    let checks = json_of(&app, get(&format!("/api/analyses/{DEMO_ID}/checks")), StatusCode::OK).await;
    assert_json_close(&doc["result"]["search"], &checks["transformations"]["search"], "default search");
    assert_json_close(&doc["result"]["search"], &engine_search(10, 20_250_601, (-3.0, 3.0), 3), "engine");
    let html = check(
        &app,
        doc["result_page"].as_str().expect("page"),
        StatusCode::OK,
        "(the seed the Soundness page uses)",
    )
    .await;
    assert!(html.contains("(the model as specified)"));
}

#[tokio::test]
async fn bad_transform_settings_are_refused_with_plain_messages() {
    let app = demo_app();
    let rows =
        wardcast::analysis::Fitted::new(&wardcast::demo::larkmoor_table().expect("table"), &demo_spec())
            .expect("fit")
            .fit()
            .nobs();
    let too_many = (rows + 1).to_string();
    let form = format!("/analyses/{DEMO_ID}/soundness/transform");
    let cases: Vec<(String, &str)> = vec![
        ("folds=1".into(), "at least 2 folds"),
        (format!("folds={too_many}"), "at most"),
        ("folds=101".into(), "at most"),
        ("folds=abc".into(), "must be a number"),
        ("folds=-3".into(), "must be a number"),
        ("seed=minus".into(), "must be a number"),
        ("lambda_low=3&lambda_high=-3".into(), "lowest power must be below the highest"),
        ("lambda_low=x".into(), "must be a number"),
        ("lambda_high=NaN".into(), "ordinary numbers"),
        ("lambda_low=-0.5".into(), "from −1 or lower"),
        ("lambda_low=-20&lambda_high=3".into(), "at most 20"),
        ("top=21".into(), "At most 20 candidates"),
    ];
    for (body, needle) in &cases {
        let response = send(&app, post(&form, "application/x-www-form-urlencoded", body.clone())).await;
        assert_eq!(response.status(), StatusCode::BAD_REQUEST, "form {body}");
        let html = text(response).await;
        assert!(html.contains(needle), "form {body}: {needle:?} in {html}");
    }
    let api = format!("/api/analyses/{DEMO_ID}/soundness/transform");
    let json_cases = [
        (serde_json::json!({"folds": 1}), "at least 2 folds"),
        (serde_json::json!({"folds": rows + 1}), "at most"),
        (serde_json::json!({"lambda_low": 2, "lambda_high": -2}), "lowest power must be below the highest"),
        (serde_json::json!({"folds": "ten"}), "could not be read"),
        (serde_json::json!({"seed": -1}), "could not be read"),
        (serde_json::json!({"fold": 5}), "could not be read"),
    ];
    for (body, needle) in json_cases {
        let v =
            json_of(&app, post(&api, "application/json", body.to_string()), StatusCode::BAD_REQUEST).await;
        assert_eq!(v["status"], 400, "{body}");
        assert!(v["error"].as_str().expect("error").contains(needle), "{body}: {v}");
    }
    let v = json_of(&app, post(&api, "application/json", "{not json"), StatusCode::BAD_REQUEST).await;
    assert!(v["error"].as_str().expect("error").contains("could not be read"));
    // Unknown analyses and jobs.
    json_of(
        &app,
        post("/api/analyses/nowhere/soundness/transform", "application/json", "{}"),
        StatusCode::NOT_FOUND,
    )
    .await;
    let base = format!("/analyses/{DEMO_ID}/soundness/transform");
    check(&app, &format!("{base}?job=../x"), StatusCode::BAD_REQUEST, "letter j").await;
    check(&app, &format!("{base}?job=j999999"), StatusCode::NOT_FOUND, "no job").await;
    // Without a job the address leads to the form.
    let response = send(&app, get(&base)).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    assert_eq!(header_of(&response, "location"), format!("/analyses/{DEMO_ID}/soundness#search-again"));
    // A job of another kind has no table here.
    let job = json_of(
        &app,
        post(
            &format!("/api/analyses/{DEMO_ID}/contenders/search"),
            "application/json",
            r#"{"candidates":["unemployment_pct","vacancy_pct"],"folds":5,"repeats":1}"#,
        ),
        StatusCode::ACCEPTED,
    )
    .await;
    let id = job["id"].as_str().expect("id").to_owned();
    assert_eq!(wait_for(&app, &id).await["state"], "done");
    check(&app, &format!("{base}?job={id}"), StatusCode::OK, "not a transformation search").await;
}

/// A workspace holding one analysis (id `wide`) of 90 invented areas whose model has 30 positive
/// noise indicators, so that its transformation search takes long enough to be cancelled.
fn wide_app() -> Router {
    let n = 90;
    let mut seed: u64 = 0x2545_f491_4f6c_dd1d;
    let mut next = move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        1.0 + (seed % 10_000) as f64 / 100.0
    };
    let keys: Vec<String> = (0..n).map(|i| format!("A-{i:03}")).collect();
    let names: Vec<String> = (0..30).map(|j| format!("x{j:02}")).collect();
    let mut columns =
        vec![wardcast_engine::Column::from_f64("y", &(0..n).map(|_| next()).collect::<Vec<_>>())];
    for name in &names {
        columns.push(wardcast_engine::Column::from_f64(
            name.clone(),
            &(0..n).map(|_| next()).collect::<Vec<_>>(),
        ));
    }
    let table = Table::new(keys, columns).expect("table");
    let analysis = Analysis::build(AnalysisParts {
        id: "wide".into(),
        name: "Wide".into(),
        glossary: wardcast::web::Glossary::new("areas"),
        source: Arc::new(Source::bare("Wide", table)),
        spec: wardcast_contract::spec::ModelSpec::new("y", names.iter().map(String::as_str)),
        parent: None,
    })
    .expect("the wide model fits");
    let state = AppState::new();
    state.insert(analysis).expect("insert");
    router(state, SecurityConfig::local(PORT))
}

#[tokio::test]
async fn a_transform_job_can_be_cancelled() {
    let app = wide_app();
    let started = std::time::Instant::now();
    let id = start_transform(&app, "wide", &serde_json::json!({"folds": 10, "top": 20})).await;
    let doc =
        json_of(&app, post(&format!("/api/jobs/{id}/cancel"), "application/json", ""), StatusCode::OK).await;
    assert_eq!(doc["id"], id.as_str());
    let doc = wait_for(&app, &id).await;
    let state = doc["state"].as_str().expect("state");
    assert!(state == "cancelled" || state == "done", "{doc}");
    let html =
        check(&app, &format!("/analyses/wide/soundness/transform?job={id}"), StatusCode::OK, "Search again")
            .await;
    eprintln!("the wide search ended {state} after {:?}", started.elapsed());
    if state == "cancelled" {
        assert!(doc["total"] == 0 || doc["done"].as_u64() < doc["total"].as_u64(), "{doc}");
        assert!(doc.get("result").is_none(), "a cancelled job keeps nothing");
        assert!(html.contains("cancelled before it finished"));
    }
    // Cancelled part of the way through: the job stops between two candidates.
    let id = start_transform(&app, "wide", &serde_json::json!({"folds": 10, "top": 20})).await;
    for _ in 0..1200 {
        let doc = json_of(&app, get(&format!("/api/jobs/{id}")), StatusCode::OK).await;
        if doc["done"].as_u64() > Some(0) || doc["state"] != "running" {
            break;
        }
        tokio::time::sleep(std::time::Duration::from_millis(5)).await;
    }
    json_of(&app, post(&format!("/api/jobs/{id}/cancel"), "application/json", ""), StatusCode::OK).await;
    let doc = wait_for(&app, &id).await;
    eprintln!("the second wide search ended {} at {} of {}", doc["state"], doc["done"], doc["total"]);
    match doc["state"].as_str() {
        Some("cancelled") => assert!(doc["done"].as_u64() < doc["total"].as_u64(), "{doc}"),
        Some("done") => assert_eq!(doc["done"], doc["total"]),
        _ => panic!("{doc}"),
    }
}

#[tokio::test]
async fn user_text_is_escaped_on_the_transform_result_page() {
    let app = nasty_app();
    let response = send(
        &app,
        post("/analyses/nasty/soundness/transform", "application/x-www-form-urlencoded", "folds=5&seed=3"),
    )
    .await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    let job = header_of(&response, "location").trim_start_matches("/jobs/").to_owned();
    let doc = wait_for(&app, &job).await;
    assert_eq!(doc["state"], "done", "{doc}");
    // The odd column is searched, so its name is in the labels of the JSON, intact.
    assert!(
        doc["result"]["search"]["result"]["searched"]
            .as_array()
            .expect("searched")
            .iter()
            .any(|c| c == NASTY)
    );
    for path in [format!("/jobs/{job}"), format!("/analyses/nasty/soundness/transform?job={job}")] {
        let response = send(&app, get(&path)).await;
        assert_eq!(response.status(), StatusCode::OK, "GET {path}");
        let html = text(response).await;
        assert!(!html.contains(NASTY), "{path} contains the raw text");
        assert!(!html.contains("<script"), "{path} contains a script tag");
        assert!(html.contains(NASTY_ESCAPED), "{path} shows the escaped text");
    }
}

//! Router tests of the contenders routes: the search job against the engine run directly, the
//! seeded cross-validation, cancelling, the partial F-test, the drop-one table, every bad request
//! and escaping.

use std::sync::Arc;
use std::time::Duration;

use axum::Router;
use axum::body::Body;
use axum::http::{Request, StatusCode};
use wardcast::security::SecurityConfig;
use wardcast::web::{Analysis, AnalysisParts, AppState, Glossary, Source, router};
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::selection::{
    Candidates, CvOptions, DropOneOptions, SearchOptions, best_subsets, cross_validate, drop_one,
    partial_f_test,
};
use wardcast_engine::{Column, Design, QrOptions, Table};

use crate::{NASTY, NASTY_ESCAPED, PORT, get, header_of, post, post_json, sample_analysis, send, text};

/// The demo's candidate columns used in these tests (the demo model's five plus two more).
const DEMO_CANDIDATES: [&str; 7] = [
    "unemployment_pct",
    "vacancy_pct",
    "median_income",
    "youth_share_pct",
    "alcohol_outlets_per_1k",
    "afterschool_seats_per_100",
    "streetlight_outages_per_km",
];

/// The demo workspace and its router.
pub fn demo_app() -> (AppState, Router) {
    let state = wardcast::web::demo::demo_state().expect("the demo loads");
    (state.clone(), router(state, SecurityConfig::local(PORT)))
}

/// A workspace holding one analysis (id `noise`) of 90 invented areas with 40 noise columns, whose
/// exact subset search is far too large to finish: for cancelling.
pub fn noise_app() -> Router {
    let n = 90;
    let mut seed: u64 = 0x2545_f491_4f6c_dd1d;
    let mut next = move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed % 10_000) as f64 / 100.0
    };
    let keys: Vec<String> = (0..n).map(|i| format!("A-{i:03}")).collect();
    let mut columns = vec![Column::from_f64("y", &(0..n).map(|_| next()).collect::<Vec<_>>())];
    for j in 0..40 {
        columns.push(Column::from_f64(format!("x{j:02}"), &(0..n).map(|_| next()).collect::<Vec<_>>()));
    }
    let table = Table::new(keys, columns).expect("table");
    let analysis = Analysis::build(AnalysisParts {
        id: "noise".into(),
        name: "Noise".into(),
        glossary: Glossary::new("areas"),
        source: Arc::new(Source::bare("Noise", table)),
        spec: ModelSpec::new("y", ["x00", "x01"]),
        parent: None,
    })
    .expect("the noise model fits");
    let state = AppState::new();
    state.insert(analysis).expect("insert");
    router(state, SecurityConfig::local(PORT))
}

/// Sends a request and reads the JSON answer, checking the status.
pub async fn json(app: &Router, request: Request<Body>, expected: StatusCode) -> serde_json::Value {
    let response = send(app, request).await;
    let status = response.status();
    let body = text(response).await;
    assert_eq!(status, expected, "{body}");
    serde_json::from_str(&body).expect("JSON")
}

/// Starts a search through the API and returns the job id.
pub async fn start(app: &Router, analysis: &str, options: serde_json::Value) -> String {
    let response =
        send(app, post_json(&format!("/api/analyses/{analysis}/contenders/search"), &options)).await;
    assert_eq!(response.status(), StatusCode::ACCEPTED);
    let location = header_of(&response, "location");
    let doc: serde_json::Value = serde_json::from_str(&text(response).await).expect("JSON");
    let id = doc["id"].as_str().expect("job id").to_owned();
    assert_eq!(location, format!("/api/jobs/{id}"));
    assert_eq!(doc["result_page"], format!("/analyses/{analysis}/contenders?job={id}"));
    id
}

/// Polls the job document until the job is no longer running (at most about 60 s), and returns it.
pub async fn wait(app: &Router, job: &str) -> serde_json::Value {
    for _ in 0..1200 {
        let doc = json(app, get(&format!("/api/jobs/{job}")), StatusCode::OK).await;
        if doc["state"] != "running" {
            return doc;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    panic!("job {job} did not stop");
}

fn close(a: f64, b: f64, what: &str) {
    assert!((a - b).abs() <= 1e-12 * a.abs().max(b.abs()).max(1.0), "{what}: {a} against {b}");
}

fn opt_close(doc: &serde_json::Value, engine: Option<f64>, what: &str) {
    match engine {
        Some(x) => close(doc.as_f64().unwrap_or(f64::NAN), x, what),
        None => assert!(doc.is_null(), "{what}: {doc}"),
    }
}

/// The selection input of the demo table with `columns` as candidates, as the engine sees it.
fn demo_candidates(columns: &[&str]) -> Candidates {
    let table = wardcast::web::demo::demo_source().expect("demo").table;
    let spec = ModelSpec::new(wardcast::demo::RATE, columns.iter().copied());
    let design = Design::build(&table, &spec.to_engine().expect("spec")).expect("design");
    Candidates::from_design(&design).expect("candidates")
}

#[tokio::test]
async fn a_search_job_equals_the_engine_run_directly_and_its_cv_reproduces() {
    let (state, app) = demo_app();
    let options = serde_json::json!({
        "candidates": DEMO_CANDIDATES, "top": 3, "folds": 5, "repeats": 3, "seed": 4242
    });
    let job = start(&app, "larkmoor", options.clone()).await;
    let doc = wait(&app, &job).await;
    assert_eq!(doc["state"], "done", "{doc}");
    assert_eq!(doc["done"], doc["total"]);
    let result = &doc["result"];
    assert_eq!(result["kind"], "contenders");
    assert_eq!(result["settings"]["seed"], 4242);
    let selection = &result["selection"];
    assert_eq!(selection["kind"], "selection");

    let cands = demo_candidates(&DEMO_CANDIDATES);
    let search = best_subsets(&cands, &SearchOptions { top: 3, ..SearchOptions::default() }).expect("search");
    assert_eq!(selection["rows_used"], search.nobs());
    let sizes = selection["sizes"].as_array().expect("sizes");
    assert_eq!(sizes.len(), search.sizes().len());
    for (s, size) in sizes.iter().zip(search.sizes()) {
        assert_eq!(s["size"], size.size());
        let models = s["models"].as_array().expect("models");
        assert_eq!(models.len(), size.models().len());
        for (m, model) in models.iter().zip(size.models()) {
            let what = format!("size {} rank {}", size.size(), model.rank_in_size());
            let terms: Vec<&str> =
                m["terms"].as_array().expect("terms").iter().map(|t| t.as_str().expect("term")).collect();
            assert_eq!(terms, model.labels(), "{what}");
            close(m["sse"].as_f64().expect("sse"), model.sse(), &format!("{what} SSE"));
            close(m["r_squared"].as_f64().expect("r2"), model.r_squared(), &format!("{what} R²"));
            close(
                m["adj_r_squared"].as_f64().expect("adj"),
                model.adj_r_squared(),
                &format!("{what} adjusted R²"),
            );
            opt_close(&m["cp"], model.cp(), &format!("{what} Cp"));
            opt_close(&m["aic"], model.aic(), &format!("{what} AIC"));
            opt_close(&m["sbc"], model.sbc(), &format!("{what} SBC"));
            opt_close(&m["press"], model.press(), &format!("{what} PRESS"));
        }
    }

    // Cross-validation: the best model of each size, then the demo model when it is not one of them.
    let mut models: Vec<Vec<usize>> =
        search.sizes().iter().filter_map(|s| s.models().first().map(|m| m.terms().to_vec())).collect();
    let own: Vec<usize> = vec![0, 1, 3, 4, 5];
    if !models.contains(&own) {
        models.push(own);
    }
    let cv = cross_validate(
        &cands,
        &models,
        &CvOptions { folds: 5, repeats: 3, seed: 4242, ..CvOptions::default() },
    )
    .expect("cv");
    let cv_doc = &selection["cross_validation"];
    assert_eq!(cv_doc["seed"], 4242);
    assert_eq!(cv_doc["folds"], 5);
    let cv_models = cv_doc["models"].as_array().expect("cv models");
    assert_eq!(cv_models.len(), cv.models().len());
    for (m, model) in cv_models.iter().zip(cv.models()) {
        close(m["rmse"]["mean"].as_f64().expect("rmse"), model.rmse().mean, "CV RMSE mean");
        close(m["rmse"]["sd"].as_f64().expect("sd"), model.rmse().sd, "CV RMSE sd");
    }

    // The own model is reported and the brief's view is stored with it marked chosen.
    let own_model = &result["own_model"];
    assert_eq!(own_model["terms"].as_array().expect("terms").len(), 5);
    let choice = state.get("larkmoor").expect("lock").expect("demo").extras().expect("extras").model_choice;
    let choice = choice.expect("the model choice is stored");
    let chosen: Vec<_> = choice.candidates.iter().filter(|c| c.chosen).collect();
    assert_eq!(chosen.len(), 1);
    assert_eq!(chosen[0].predictors.len(), 5);
    assert_eq!(choice.cv_seeds, vec![4242]);
    assert_eq!(serde_json::to_value(&choice).expect("json"), result["model_choice"]);

    // The same seed gives the same folds and errors.
    let again = wait(&app, &start(&app, "larkmoor", options).await).await;
    assert_eq!(again["result"]["selection"]["cross_validation"], *cv_doc);
}

#[tokio::test]
async fn the_form_starts_a_job_whose_result_page_shows_the_criteria() {
    let (_, app) = demo_app();
    let page = text(send(&app, get("/analyses/larkmoor/contenders")).await).await;
    assert!(page.contains(r#"action="/analyses/larkmoor/contenders/search""#));
    assert!(page.contains(
        r#"name="candidate" value="unemployment_pct" aria-label="Search over unemployment_pct" checked"#
    ));
    assert!(
        page.contains(r#"name="candidate" value="median_income" aria-label="Search over median_income">"#)
    );
    assert!(page.contains(r#"name="seed" min="0" value="20240601""#), "the default seed is shown");
    assert!(page.contains("Read before deciding"), "the cautions panel");
    assert!(page.contains("Each term of the current model, left out in turn"));

    let body = DEMO_CANDIDATES.iter().map(|c| format!("candidate={c}")).collect::<Vec<_>>().join("&")
        + "&forced=unemployment_pct&max_size=4&top=2&folds=4&repeats=2&seed=11&group=";
    let response =
        send(&app, post("/analyses/larkmoor/contenders/search", "application/x-www-form-urlencoded", body))
            .await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    let location = header_of(&response, "location");
    let job = location.strip_prefix("/jobs/").expect("a job page").to_owned();
    let doc = wait(&app, &job).await;
    assert_eq!(doc["state"], "done", "{doc}");
    let selection = &doc["result"]["selection"];
    assert_eq!(selection["forced"], serde_json::json!(["unemployment_pct"]));
    assert_eq!(selection["sizes"].as_array().expect("sizes").last().expect("a size")["size"], 4);

    let page = text(send(&app, get(&format!("/analyses/larkmoor/contenders?job={job}"))).await).await;
    assert!(page.contains("P-values after a search are optimistic"));
    assert!(page.contains("with seed 11"), "the seed is recorded");
    for size in selection["sizes"].as_array().expect("sizes") {
        for m in size["models"].as_array().expect("models") {
            for key in ["sse", "adj_r_squared", "cp", "aic", "sbc", "press"] {
                let raw = format!("{:?}", m[key].as_f64().expect("finite"));
                assert!(page.contains(&format!(r#"<data value="{raw}">"#)), "{key} {raw} is shown");
            }
        }
    }
    assert!(page.matches("<svg").count() >= 6, "one chart per criterion");
    assert!(page.contains("unemployment_pct, alcohol_outlets_per_1k"), "terms are listed by name");
    assert!(page.contains(&format!(r#"href="/jobs/{job}""#)), "the search is listed");
    assert!(!page.contains("style="));
}

#[tokio::test]
async fn a_large_search_can_be_cancelled_and_its_page_says_so() {
    let app = noise_app();
    let candidates: Vec<String> = (0..40).map(|j| format!("x{j:02}")).collect();
    let job = start(&app, "noise", serde_json::json!({ "candidates": candidates, "top": 20 })).await;
    let page = text(send(&app, get(&format!("/analyses/noise/contenders?job={job}"))).await).await;
    assert!(page.contains("still running"), "a running search has no result yet");
    let doc =
        json(&app, post(&format!("/api/jobs/{job}/cancel"), "application/json", ""), StatusCode::OK).await;
    assert_eq!(doc["id"], job.as_str());
    let doc = wait(&app, &job).await;
    let state = doc["state"].as_str().expect("state");
    assert!(state == "cancelled" || state == "done", "{doc}");
    if state == "cancelled" {
        let page = text(send(&app, get(&format!("/analyses/noise/contenders?job={job}"))).await).await;
        assert!(page.contains("was cancelled before it finished"));
    }
}

#[tokio::test]
async fn every_bad_search_request_is_refused_with_its_reason() {
    let (_, app) = demo_app();
    let cases: [(serde_json::Value, StatusCode, &str); 12] = [
        (serde_json::json!({ "candidates": [] }), StatusCode::BAD_REQUEST, "at least one candidate"),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "max_size": 0 }),
            StatusCode::BAD_REQUEST,
            "at least 1",
        ),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "folds": 1 }),
            StatusCode::BAD_REQUEST,
            "at least 2 folds",
        ),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "folds": 500 }),
            StatusCode::BAD_REQUEST,
            "500 folds",
        ),
        (serde_json::json!({ "candidates": ["nowhere"] }), StatusCode::BAD_REQUEST, "not a column"),
        (
            serde_json::json!({ "candidates": ["assault_rate_per_10k"] }),
            StatusCode::BAD_REQUEST,
            "cannot be a candidate",
        ),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "forced": ["median_income"] }),
            StatusCode::BAD_REQUEST,
            "not among the chosen",
        ),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "top": 0 }),
            StatusCode::BAD_REQUEST,
            "between 1 and 20",
        ),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "repeats": 0 }),
            StatusCode::BAD_REQUEST,
            "between 1 and 50",
        ),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "group": "nowhere" }),
            StatusCode::BAD_REQUEST,
            "not a column",
        ),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "folds": 10, "group": "borough" }),
            StatusCode::BAD_REQUEST,
            "as many groups as folds",
        ),
        (
            serde_json::json!({ "candidates": ["vacancy_pct"], "colour": "red" }),
            StatusCode::BAD_REQUEST,
            "could not be read",
        ),
    ];
    for (body, status, message) in cases {
        let doc = json(&app, post_json("/api/analyses/larkmoor/contenders/search", &body), status).await;
        assert_eq!(doc["status"], status.as_u16(), "{body}");
        assert!(doc["error"].as_str().expect("error").contains(message), "{body}: {doc}");
    }
    let doc = json(
        &app,
        post("/api/analyses/larkmoor/contenders/search", "application/json", "{"),
        StatusCode::BAD_REQUEST,
    )
    .await;
    assert!(doc["error"].as_str().expect("error").contains("could not be read"));
    json(
        &app,
        post_json("/api/analyses/nowhere/contenders/search", &serde_json::json!({"candidates": ["x"]})),
        StatusCode::NOT_FOUND,
    )
    .await;
    json(
        &app,
        post_json("/api/analyses/Bad_Id/contenders/search", &serde_json::json!({"candidates": ["x"]})),
        StatusCode::BAD_REQUEST,
    )
    .await;

    // The form: no candidates, a number that is not one, and a body that is not a form.
    let form = "application/x-www-form-urlencoded";
    let cases = [
        ("top=3", form, "at least one candidate"),
        ("candidate=vacancy_pct&folds=two", form, "must be a whole number"),
        ("candidate=vacancy_pct&max_size=0", form, "at least 1"),
        ("{}", "application/json", "must be sent as a web form"),
    ];
    for (body, content_type, message) in cases {
        let response = send(&app, post("/analyses/larkmoor/contenders/search", content_type, body)).await;
        assert_eq!(response.status(), StatusCode::BAD_REQUEST, "{body}");
        assert!(text(response).await.contains(message), "{body}");
    }
    let page = text(send(&app, get("/analyses/larkmoor/contenders")).await).await;
    assert!(!page.contains("Searches of this analysis"), "no refused request started a job");

    // Result pages: a malformed job id, an unknown job, a job of another analysis.
    for (path, status) in [
        ("/analyses/larkmoor/contenders?job=x1", StatusCode::BAD_REQUEST),
        ("/analyses/larkmoor/contenders?job=j999", StatusCode::NOT_FOUND),
        ("/analyses/nowhere/contenders", StatusCode::NOT_FOUND),
    ] {
        assert_eq!(send(&app, get(path)).await.status(), status, "{path}");
    }
}

#[tokio::test]
async fn the_partial_f_test_matches_the_engine_and_refuses_models_that_are_not_nested() {
    let (_, app) = demo_app();
    let doc = json(
        &app,
        get("/api/analyses/larkmoor/contenders/compare?a=alcohol_outlets_per_1k&b=alcohol_outlets_per_1k,afterschool_seats_per_100"),
        StatusCode::OK,
    )
    .await;
    let cands = demo_candidates(&["alcohol_outlets_per_1k", "afterschool_seats_per_100"]);
    let test = partial_f_test(&cands, &[0], &[0, 1], &QrOptions::default()).expect("nested");
    assert_eq!(doc["kind"], "partial_f");
    assert_eq!(doc["rows_used"], cands.nrows());
    close(doc["test"]["f"].as_f64().expect("F"), test.f().expect("F"), "F");
    close(doc["test"]["p_value"].as_f64().expect("p"), test.p_value().expect("p"), "p");
    close(doc["test"]["sse_smaller"].as_f64().expect("sse"), test.sse_smaller(), "SSE");
    assert_eq!(doc["test"]["added"], serde_json::json!(["afterschool_seats_per_100"]));

    // Not nested: the engine's own message, as 422, in the API and on the page.
    let cands = demo_candidates(&["unemployment_pct", "vacancy_pct"]);
    let message =
        partial_f_test(&cands, &[0], &[1], &QrOptions::default()).expect_err("not nested").to_string();
    let doc = json(
        &app,
        get("/api/analyses/larkmoor/contenders/compare?a=unemployment_pct&b=vacancy_pct"),
        StatusCode::UNPROCESSABLE_ENTITY,
    )
    .await;
    assert_eq!(doc["error"], message.as_str());
    let response = send(&app, get("/analyses/larkmoor/contenders?a=unemployment_pct&b=vacancy_pct")).await;
    assert_eq!(response.status(), StatusCode::UNPROCESSABLE_ENTITY);
    let page = text(response).await;
    assert!(page.contains(r#"id="compare-error""#));
    assert!(page.contains("Does a larger model add anything?"), "the whole page is shown with the message");

    let page = text(send(&app, get("/analyses/larkmoor/contenders?a=alcohol_outlets_per_1k&b=alcohol_outlets_per_1k%2Cafterschool_seats_per_100")).await).await;
    assert!(page.contains(&format!(r#"class="c-f" value="{:?}""#, test.f().expect("F"))));

    for (path, message) in [
        ("/api/analyses/larkmoor/contenders/compare?a=vacancy_pct", "Name both models"),
        ("/api/analyses/larkmoor/contenders/compare?a=nowhere&b=vacancy_pct", "not a column"),
        (
            "/api/analyses/larkmoor/contenders/compare?a=vacancy_pct&b=vacancy_pct,median_income&job=j999",
            "no job",
        ),
        (
            "/api/analyses/larkmoor/contenders/compare?a=vacancy_pct&b=vacancy_pct,median_income&job=zz",
            "letter j",
        ),
    ] {
        let response = send(&app, get(path)).await;
        assert!(response.status().is_client_error(), "{path}");
        assert!(text(response).await.contains(message), "{path}");
    }
    let doc =
        json(&app, get("/api/analyses/larkmoor/contenders/compare?a=&b="), StatusCode::UNPROCESSABLE_ENTITY)
            .await;
    assert!(doc["error"].as_str().expect("error").len() > 10);
}

#[tokio::test]
async fn the_drop_one_table_matches_the_engine() {
    let (_, app) = demo_app();
    let doc = json(
        &app,
        get("/api/analyses/larkmoor/contenders/drop-one?folds=6&repeats=2&seed=5"),
        StatusCode::OK,
    )
    .await;
    let cands = demo_candidates(&wardcast::demo::DEFAULT_PREDICTORS);
    let table = drop_one(
        &cands,
        &[0, 1, 2, 3, 4],
        &DropOneOptions {
            qr: QrOptions::default(),
            cv: Some(CvOptions { folds: 6, repeats: 2, seed: 5, ..CvOptions::default() }),
        },
    )
    .expect("drop one");
    assert_eq!(doc["kind"], "drop_one");
    assert_eq!(doc["cross_validation"], serde_json::json!({ "folds": 6, "repeats": 2, "seed": 5 }));
    let rows = doc["table"]["rows"].as_array().expect("rows");
    assert_eq!(rows.len(), table.rows().len());
    for (r, row) in rows.iter().zip(table.rows()) {
        assert_eq!(r["term"], row.term());
        close(r["extra_ss"].as_f64().expect("ss"), row.extra_ss(), "extra SS");
        opt_close(&r["f"], row.f(), "F");
        opt_close(&r["p_value"], row.p_value(), "p");
        opt_close(&r["delta_cv_rmse"], row.delta_cv_rmse(), "CV change");
    }
    for (path, message) in [
        ("/api/analyses/larkmoor/contenders/drop-one?folds=1", "at least 2 folds"),
        ("/api/analyses/larkmoor/contenders/drop-one?folds=many", "whole number"),
        ("/api/analyses/larkmoor/contenders/drop-one?repeats=0", "between 1 and 50"),
    ] {
        let doc = json(&app, get(path), StatusCode::BAD_REQUEST).await;
        assert!(doc["error"].as_str().expect("error").contains(message), "{path}: {doc}");
    }
    // The page shows the same rows with the default folds.
    let page = text(send(&app, get("/analyses/larkmoor/contenders")).await).await;
    let doc = json(&app, get("/api/analyses/larkmoor/contenders/drop-one"), StatusCode::OK).await;
    for r in doc["table"]["rows"].as_array().expect("rows") {
        let raw = format!("{:?}", r["extra_ss"].as_f64().expect("ss"));
        assert!(page.contains(&format!(r#"<data value="{raw}">"#)), "{raw}");
    }
}

#[tokio::test]
async fn user_text_is_escaped_on_the_page_and_in_the_result() {
    let state = AppState::new();
    state.insert(sample_analysis("nasty", NASTY, NASTY, "LK-33")).expect("insert");
    let app = router(state, SecurityConfig::local(PORT));
    let page = text(send(&app, get("/analyses/nasty/contenders")).await).await;
    assert!(page.contains(NASTY_ESCAPED));
    assert!(!page.contains(NASTY));
    let job = start(
        &app,
        "nasty",
        serde_json::json!({ "candidates": ["unemployment_pct", "vacancy_pct", "district_type", NASTY], "folds": 4, "repeats": 1 }),
    )
    .await;
    let doc = wait(&app, &job).await;
    assert_eq!(doc["state"], "done", "{doc}");
    assert_eq!(doc["result"]["candidate_columns"][3], NASTY);
    let page = text(send(&app, get(&format!("/analyses/nasty/contenders?job={job}"))).await).await;
    assert!(page.contains(NASTY_ESCAPED));
    assert!(!page.contains(NASTY));
    let job_page = text(send(&app, get(&format!("/jobs/{job}"))).await).await;
    assert!(!job_page.contains(NASTY));
}

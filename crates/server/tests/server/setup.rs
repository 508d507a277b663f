//! Router tests of the setup routes: the Data page, refits, one-click exclusions, saving and
//! restoring through a data folder, their JSON twins, and every bad request.

use axum::Router;
use axum::body::Body;
use axum::http::{Method, Request, StatusCode, header};
use wardcast::security::SecurityConfig;
use wardcast::web::demo::{DEMO_ID, demo_source, demo_spec, demo_state, demo_state_in_store};
use wardcast::web::{AppState, router};
use wardcast_contract::dataset::SavedAnalysis;
use wardcast_contract::fit::FitDocument;
use wardcast_contract::spec::{ExclusionSpec, ModelSpec, TransformSpec};

use crate::{HOST, NASTY, NASTY_ESCAPED, PORT, check, encode, header_of, post, sample_analysis, text};

fn form(fields: &[(&str, &str)]) -> String {
    fields.iter().map(|(k, v)| format!("{}={}", encode(k), encode(v))).collect::<Vec<_>>().join("&")
}

fn post_form(path: &str, fields: &[(&str, &str)]) -> Request<Body> {
    post(path, "application/x-www-form-urlencoded", form(fields))
}

fn post_json(path: &str, body: serde_json::Value) -> Request<Body> {
    post(path, "application/json", body.to_string())
}

fn get(path: &str) -> Request<Body> {
    crate::get(path)
}

fn demo_app() -> (Router, AppState) {
    let state = demo_state().expect("the demo loads");
    (router(state.clone(), SecurityConfig::local(PORT)), state)
}

fn fit_of(state: &AppState, id: &str) -> FitDocument {
    state.get(id).expect("lock").unwrap_or_else(|| panic!("analysis {id} exists")).fit().clone()
}

/// The set-up form as the demo's Data page fills it, with `changes` applied on top.
fn demo_setup_form(changes: &[(&str, &str)]) -> Vec<(String, String)> {
    let mut fields: Vec<(String, String)> = vec![("response".into(), "assault_rate_per_10k".into())];
    for p in wardcast::demo::DEFAULT_PREDICTORS {
        fields.push(("predictor".into(), p.into()));
        fields.push((format!("transform.{p}"), "none".into()));
        fields.push((format!("lambda.{p}"), String::new()));
    }
    for (k, v) in [("weights", ""), ("intercept", "yes"), ("level", "95"), ("ex_key", ""), ("ex_reason", "")]
    {
        fields.push((k.into(), v.into()));
    }
    fields.push(("name".into(), "Changed".into()));
    for (k, v) in changes {
        if let Some(f) = fields.iter_mut().find(|(n, _)| n == k) {
            f.1 = (*v).to_owned();
        } else {
            fields.push(((*k).to_owned(), (*v).to_owned()));
        }
    }
    fields
}

fn as_refs(fields: &[(String, String)]) -> Vec<(&str, &str)> {
    fields.iter().map(|(k, v)| (k.as_str(), v.as_str())).collect()
}

#[tokio::test]
async fn the_data_page_describes_the_demo_source_and_prefills_the_form() {
    let (app, _) = demo_app();
    let response = check(&app, get("/analyses/larkmoor/data"), StatusCode::OK, "data page").await;
    let html = text(response).await;
    let phrases = [
        // The source, its columns, agencies and vintages.
        "Larkmoor districts with programme budgets",
        "Larkmoor Office of Data",
        "Larkmoor Planning Department",
        "<td>2025</td>",
        "<code>district_code</code>",
        // The join report: budget codes matching no district, districts without a budget.
        "Keys only in the second table",
        "<li><code>LK-65</code></li>",
        "<li><code>LK-7A</code></li>",
        "Keys only in the first table",
        // The rows dropped for missing values.
        "What is missing",
        "missing value in",
        // Fingerprints of both files.
        "larkmoor_districts.csv",
        "larkmoor_budgets.csv",
        "sha256:",
        // The prefilled form.
        "<option value=\"assault_rate_per_10k\" selected>",
        "<input type=\"checkbox\" name=\"predictor\" value=\"unemployment_pct\" checked>",
        "<input type=\"checkbox\" name=\"predictor\" value=\"vacancy_pct\" checked>",
        "name=\"transform.vacancy_pct\"",
        "name=\"reference.district_type\"",
        "<option value=\"yes\" selected>",
        "name=\"level\" value=\"95\"",
        "action=\"/analyses/larkmoor/refit\"",
        "action=\"/analyses/larkmoor/exclude\"",
        // Without a data folder, saving says what it needs.
        "Saving needs a data folder",
        // The cautions panel is on every analysis page.
        "Read before deciding",
        "/assets/setup.css",
    ];
    for phrase in phrases {
        assert!(html.contains(phrase), "the Data page shows {phrase:?}");
    }
    // Columns not in the model are offered unticked.
    assert!(
        html.contains("<input type=\"checkbox\" name=\"predictor\" value=\"streetlight_outages_per_km\">")
    );
    assert!(!html.contains("style="), "no inline styles");
}

#[tokio::test]
async fn refitting_with_a_logged_indicator_matches_the_engine_and_leaves_the_old_analysis() {
    let (app, state) = demo_app();
    let before = fit_of(&state, DEMO_ID);
    let fields = demo_setup_form(&[("transform.vacancy_pct", "log"), ("name", "Log vacancy")]);
    let response =
        check(&app, post_form("/analyses/larkmoor/refit", &as_refs(&fields)), StatusCode::SEE_OTHER, "refit")
            .await;
    let location = header_of(&response, "location");
    assert_eq!(location, "/analyses/log-vacancy");

    let mut spec = demo_spec();
    let vacancy = spec.predictors.iter_mut().find(|p| p.column == "vacancy_pct").expect("vacancy");
    vacancy.transform = Some(TransformSpec::Log);
    let table = demo_source().expect("demo source").table;
    let direct =
        wardcast::analysis::Fitted::new(&table, &spec).expect("fits").fit_document().expect("document");
    let new = state.get("log-vacancy").expect("lock").expect("the new analysis");
    assert_eq!(new.fit(), &direct, "the refit equals the engine's fit of the same spec");
    assert_eq!(new.parent(), Some(DEMO_ID));
    assert!(new.checks_ready(), "diagnostics are computed with the refit");
    assert_eq!(new.name(), "Log vacancy");
    assert_eq!(fit_of(&state, DEMO_ID), before, "the old analysis is unchanged");

    // The page of the new analysis shows the logged term; its Data page links back.
    let effects = text(check(&app, get(&location), StatusCode::OK, "effects").await).await;
    assert!(effects.contains("log(vacancy_pct)"));
    let data = text(check(&app, get("/analyses/log-vacancy/data"), StatusCode::OK, "data").await).await;
    assert!(data.contains("Refitted from <a href=\"/analyses/larkmoor/data\">larkmoor</a>"));
    assert!(data.contains("<option value=\"log\" selected>"));
}

#[tokio::test]
async fn refit_options_reach_the_spec() {
    let (app, state) = demo_app();
    // (form changes, what the new spec must satisfy)
    type Want = fn(&ModelSpec) -> bool;
    type Case = (&'static [(&'static str, &'static str)], Want, &'static str);
    let cases: [Case; 5] = [
        (
            &[("transform.unemployment_pct", "power"), ("lambda.unemployment_pct", "0.5")],
            |s| s.predictors[0].transform == Some(TransformSpec::Power { lambda: 0.5 }),
            "power",
        ),
        (&[("level", "90")], |s| (s.level - 0.9).abs() < 1e-15, "level"),
        (&[("weights", "residents")], |s| s.weights.as_deref() == Some("residents"), "weights"),
        (
            &[("predictor", "district_type"), ("reference.district_type", "residential")],
            |s| {
                s.predictors.last().is_some_and(|p| {
                    p.column == "district_type" && p.reference_level.as_deref() == Some("residential")
                })
            },
            "reference level",
        ),
        (
            &[("ex_key", "LK-47"), ("ex_reason", "Arena district: 820 residents")],
            |s| {
                s.exclusions
                    == [ExclusionSpec { key: "LK-47".into(), reason: "Arena district: 820 residents".into() }]
            },
            "exclusion",
        ),
    ];
    for (changes, want, what) in cases {
        let fields = demo_setup_form(changes);
        let response = check(
            &app,
            post_form("/analyses/larkmoor/refit", &as_refs(&fields)),
            StatusCode::SEE_OTHER,
            what,
        )
        .await;
        let id = header_of(&response, "location").trim_start_matches("/analyses/").to_owned();
        let spec = state.get(&id).expect("lock").expect("new analysis").spec().clone();
        assert!(want(&spec), "{what}: {spec:?}");
    }
    // Removing an exclusion puts the area back.
    let excluded = state
        .list()
        .expect("list")
        .into_iter()
        .find(|a| !a.spec().exclusions.is_empty())
        .expect("the excluded analysis");
    let mut fields = demo_setup_form(&[]);
    fields.push(("ex_key".into(), "LK-47".into()));
    fields.push(("ex_reason".into(), "Arena district".into()));
    fields.push(("ex_remove".into(), "LK-47".into()));
    let path = format!("/analyses/{}/refit", excluded.id());
    let response = check(&app, post_form(&path, &as_refs(&fields)), StatusCode::SEE_OTHER, "put back").await;
    let id = header_of(&response, "location").trim_start_matches("/analyses/").to_owned();
    assert!(state.get(&id).expect("lock").expect("new").spec().exclusions.is_empty());
}

#[tokio::test]
async fn excluding_the_arena_district_makes_a_new_analysis_and_keeps_the_old() {
    let (app, state) = demo_app();
    let before = fit_of(&state, DEMO_ID);
    let reason = "Arena district: 820 residents, so its rate swings on a handful of incidents";
    let request = post_form("/analyses/larkmoor/exclude", &[("key", "LK-47"), ("reason", reason)]);
    let response = check(&app, request, StatusCode::SEE_OTHER, "exclude").await;
    let location = header_of(&response, "location");
    let id = location
        .strip_prefix("/analyses/")
        .and_then(|l| l.strip_suffix("/soundness"))
        .expect("soundness page");
    let after = fit_of(&state, id);
    assert_eq!(after.rows_used, before.rows_used - 1, "one row fewer");
    assert!(after.rows_dropped.iter().any(|d| d.key == "LK-47" && d.reason.contains(reason)));
    assert_eq!(after.spec.exclusions, vec![ExclusionSpec { key: "LK-47".into(), reason: reason.into() }]);
    assert_eq!(fit_of(&state, DEMO_ID), before, "the old analysis is unchanged");

    let data = text(check(&app, get(&format!("/analyses/{id}/data")), StatusCode::OK, "data").await).await;
    assert!(data.contains("Because the analyst left them out"));
    assert!(data.contains(&format!("<tr><td><code>LK-47</code></td><td>{reason}</td></tr>")));

    // `then` chooses the page shown afterwards.
    for (then, suffix) in [("effects", ""), ("areas", "/areas"), ("soundness", "/soundness")] {
        let request = post_form(
            &format!("/analyses/{id}/exclude"),
            &[("key", "LK-12"), ("reason", "check"), ("then", then)],
        );
        let response = check(&app, request, StatusCode::SEE_OTHER, then).await;
        let location = header_of(&response, "location");
        assert!(location.starts_with("/analyses/") && location.ends_with(suffix), "{then}: {location}");
        let new_id = location.trim_start_matches("/analyses/").trim_end_matches(suffix);
        assert_eq!(fit_of(&state, new_id).spec.exclusions.len(), 2);
    }
}

#[tokio::test]
async fn bad_requests_are_refused_with_a_plain_message() {
    let (app, state) = demo_app();
    let refit = |changes: &[(&str, &str)]| {
        let fields = demo_setup_form(changes);
        post_form("/analyses/larkmoor/refit", &as_refs(&fields))
    };
    let long = "x".repeat(501);
    let cases: Vec<(Request<Body>, StatusCode, &str, &str)> = vec![
        (
            post_form("/analyses/larkmoor/exclude", &[("key", "LK-47")]),
            StatusCode::BAD_REQUEST,
            "needs a reason",
            "missing reason",
        ),
        (
            post_form("/analyses/larkmoor/exclude", &[("key", "LK-47"), ("reason", "   ")]),
            StatusCode::BAD_REQUEST,
            "needs a reason",
            "blank reason",
        ),
        (
            post_form("/analyses/larkmoor/exclude", &[("key", "LK-47"), ("reason", &long)]),
            StatusCode::BAD_REQUEST,
            "longer than 500",
            "long reason",
        ),
        (
            post_form("/analyses/larkmoor/exclude", &[("key", "LK-999"), ("reason", "x")]),
            StatusCode::BAD_REQUEST,
            "has the key",
            "unknown key",
        ),
        (
            post_form("/analyses/larkmoor/exclude", &[("reason", "x")]),
            StatusCode::BAD_REQUEST,
            "which area",
            "no key",
        ),
        (
            post_form("/analyses/larkmoor/exclude", &[("key", "LK-47"), ("reason", "x"), ("then", "brief")]),
            StatusCode::BAD_REQUEST,
            "soundness, effects or areas",
            "bad then",
        ),
        (
            post_form("/analyses/nowhere/exclude", &[("key", "LK-47"), ("reason", "x")]),
            StatusCode::NOT_FOUND,
            "no analysis",
            "unknown analysis",
        ),
        (
            refit(&[("ex_key", "LK-47"), ("ex_reason", "")]),
            StatusCode::BAD_REQUEST,
            "needs a reason",
            "refit: missing reason",
        ),
        (
            refit(&[("ex_key", "LK-999"), ("ex_reason", "gone")]),
            StatusCode::BAD_REQUEST,
            "has the key",
            "refit: unknown key",
        ),
        (
            refit(&[("ex_key", ""), ("ex_reason", "orphan reason")]),
            StatusCode::BAD_REQUEST,
            "without the key",
            "refit: reason without key",
        ),
        (
            refit(&[("predictor", "no_such_column")]),
            StatusCode::BAD_REQUEST,
            "is not in the table",
            "unknown column",
        ),
        (
            refit(&[("response", "no_such_column")]),
            StatusCode::BAD_REQUEST,
            "is not in the table",
            "unknown response",
        ),
        (
            refit(&[("predictor", "assault_rate_per_10k")]),
            StatusCode::BAD_REQUEST,
            "cannot also be an indicator",
            "response among predictors",
        ),
        (
            refit(&[("transform.vacancy_pct", "power"), ("lambda.vacancy_pct", "half")]),
            StatusCode::BAD_REQUEST,
            "must be a number",
            "bad lambda",
        ),
        (
            refit(&[("transform.vacancy_pct", "power"), ("lambda.vacancy_pct", "inf")]),
            StatusCode::BAD_REQUEST,
            "must be a number",
            "infinite lambda",
        ),
        (
            refit(&[("transform.vacancy_pct", "cube")]),
            StatusCode::BAD_REQUEST,
            "not a transform",
            "unknown transform",
        ),
        (refit(&[("level", "150")]), StatusCode::BAD_REQUEST, "strictly between 0 and 100", "bad level"),
        (
            refit(&[("level", "ninety")]),
            StatusCode::BAD_REQUEST,
            "strictly between 0 and 100",
            "level not a number",
        ),
        (
            refit(&[("predictor", "district_type"), ("reference.district_type", "castle")]),
            StatusCode::BAD_REQUEST,
            "no value",
            "unknown reference level",
        ),
        (refit(&[("intercept", "maybe")]), StatusCode::BAD_REQUEST, "yes or no", "bad intercept"),
        (refit(&[("weights", "district_name")]), StatusCode::BAD_REQUEST, "holds text", "text weights"),
        (
            refit(&[("predictor", "district_name"), ("transform.district_name", "log")]),
            StatusCode::BAD_REQUEST,
            "cannot be transformed",
            "transformed text",
        ),
        (
            post_form(
                "/analyses/larkmoor/refit",
                &[("response", "assault_rate_per_10k"), ("intercept", "no")],
            ),
            StatusCode::UNPROCESSABLE_ENTITY,
            "The model was not fitted",
            "the engine refuses an empty model",
        ),
        (
            post("/analyses/larkmoor/refit", "application/json", "{}".to_owned()),
            StatusCode::BAD_REQUEST,
            "takes a form",
            "non-form body",
        ),
        (
            post("/analyses/larkmoor/exclude", "text/plain", "key=LK-47&reason=x".to_owned()),
            StatusCode::BAD_REQUEST,
            "takes a form",
            "plain-text body",
        ),
        (
            post(
                "/analyses/larkmoor/exclude",
                "application/x-www-form-urlencoded",
                "key=%zz&reason=x".to_owned(),
            ),
            StatusCode::BAD_REQUEST,
            "could not be read",
            "bad percent encoding",
        ),
        (
            post(
                "/analyses/larkmoor/exclude",
                "application/x-www-form-urlencoded",
                "key=%FF&reason=x".to_owned(),
            ),
            StatusCode::BAD_REQUEST,
            "could not be read",
            "not UTF-8",
        ),
        (
            post_form("/analyses/larkmoor/save", &[("title", "Demo")]),
            StatusCode::BAD_REQUEST,
            "needs a data folder",
            "save without a store",
        ),
        (
            post_json("/api/analyses/larkmoor/exclude", serde_json::json!({"key": "LK-47"})),
            StatusCode::BAD_REQUEST,
            "could not be read",
            "JSON: no reason",
        ),
        (
            post_json(
                "/api/analyses/larkmoor/exclude",
                serde_json::json!({"key": "LK-47", "reason": "x", "extra": 1}),
            ),
            StatusCode::BAD_REQUEST,
            "unknown field",
            "JSON: unknown field",
        ),
        (
            post_json("/api/analyses/larkmoor/exclude", serde_json::json!({"key": "LK-47", "reason": ""})),
            StatusCode::BAD_REQUEST,
            "needs a reason",
            "JSON: empty reason",
        ),
        (
            post("/api/analyses/larkmoor/refit", "application/json", "{not json".to_owned()),
            StatusCode::BAD_REQUEST,
            "could not be read",
            "JSON: malformed",
        ),
        (
            post("/api/analyses/larkmoor/refit", "application/x-www-form-urlencoded", "a=b".to_owned()),
            StatusCode::BAD_REQUEST,
            "JSON body",
            "JSON: wrong type",
        ),
        (
            post_json(
                "/api/analyses/larkmoor/refit",
                serde_json::json!({"spec": {"response": "assault_rate_per_10k", "predictors": ["assault_rate_per_10k"]}}),
            ),
            StatusCode::BAD_REQUEST,
            "cannot also be an indicator",
            "JSON: response among predictors",
        ),
        (
            post_json(
                "/api/analyses/larkmoor/refit",
                serde_json::json!({"spec": {"response": "assault_rate_per_10k", "predictors": ["vacancy_pct"], "level": 1.5}}),
            ),
            StatusCode::BAD_REQUEST,
            "strictly between",
            "JSON: bad level",
        ),
        (
            post_json("/api/analyses/larkmoor/save", serde_json::json!({"title": "Demo"})),
            StatusCode::BAD_REQUEST,
            "needs a data folder",
            "JSON: save without a store",
        ),
    ];
    let count = state.list().expect("list").len();
    for (request, status, phrase, what) in cases {
        let is_api = request.uri().path().starts_with("/api/");
        let response = check(&app, request, status, what).await;
        let body = text(response).await;
        if is_api {
            let json: serde_json::Value = serde_json::from_str(&body).expect("JSON error");
            assert_eq!(json["status"], status.as_u16(), "{what}");
            assert!(json["error"].as_str().expect("message").contains(phrase), "{what}: {json}");
        } else {
            assert!(body.contains(phrase), "{what}: the page says {phrase:?}");
        }
    }
    assert_eq!(state.list().expect("list").len(), count, "no refused request made an analysis");

    // A refused set-up form shows the Data page again, keeping what was entered.
    let response = check(
        &app,
        refit(&[("level", "150"), ("transform.vacancy_pct", "sqrt")]),
        StatusCode::BAD_REQUEST,
        "kept",
    )
    .await;
    let html = text(response).await;
    assert!(html.contains("The model was not fitted"));
    assert!(html.contains("<option value=\"sqrt\" selected>"), "the form keeps the chosen transform");

    // GET on the POST routes is 405.
    for path in [
        "/analyses/larkmoor/refit",
        "/analyses/larkmoor/exclude",
        "/analyses/larkmoor/save",
        "/api/analyses/larkmoor/refit",
        "/api/analyses/larkmoor/exclude",
        "/api/analyses/larkmoor/save",
    ] {
        check(&app, get(path), StatusCode::METHOD_NOT_ALLOWED, path).await;
    }
    // POST without an Origin is refused by the cross-site guard.
    let bare = Request::builder()
        .method(Method::POST)
        .uri("/analyses/larkmoor/exclude")
        .header(header::HOST, HOST)
        .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
        .header(header::ORIGIN, "http://evil.example")
        .body(Body::from("key=LK-47&reason=x"))
        .expect("request");
    check(&app, bare, StatusCode::FORBIDDEN, "cross-site post").await;
}

#[tokio::test]
async fn the_json_twins_answer_with_documents() {
    let (app, state) = demo_app();
    let response = check(&app, get("/api/analyses/larkmoor/spec"), StatusCode::OK, "spec").await;
    assert_eq!(header_of(&response, "content-type"), "application/json");
    let spec: ModelSpec = serde_json::from_str(&text(response).await).expect("a spec");
    assert_eq!(spec, demo_spec());

    let mut logged = demo_spec();
    logged.predictors[2].transform = Some(TransformSpec::Log);
    let body = serde_json::json!({"spec": logged, "name": "From the API"});
    let response =
        check(&app, post_json("/api/analyses/larkmoor/refit", body), StatusCode::CREATED, "api refit").await;
    let created: serde_json::Value = serde_json::from_str(&text(response).await).expect("json");
    assert_eq!(created["id"], "from-the-api");
    assert_eq!(created["page"], "/analyses/from-the-api");
    let fit: FitDocument = serde_json::from_value(created["fit"].clone()).expect("fit");
    assert_eq!(fit, fit_of(&state, "from-the-api"));
    assert_eq!(fit.spec, logged);

    let body = serde_json::json!({"key": "LK-47", "reason": "Arena district"});
    let response = check(
        &app,
        post_json("/api/analyses/from-the-api/exclude", body),
        StatusCode::CREATED,
        "api exclude",
    )
    .await;
    let created: serde_json::Value = serde_json::from_str(&text(response).await).expect("json");
    let id = created["id"].as_str().expect("id");
    assert_eq!(created["fit"]["rows_used"].as_u64(), Some(fit.rows_used as u64 - 1));
    assert_eq!(fit_of(&state, id).spec.exclusions[0].reason, "Arena district");
}

#[tokio::test]
async fn saving_and_restarting_through_a_data_folder_keeps_the_analysis() {
    let dir = tempfile::tempdir().expect("temp dir");
    let open = || wardcast_store::Store::open(dir.path()).expect("the store opens").0;

    let state = demo_state_in_store(open()).expect("the demo loads into the store");
    let app = router(state.clone(), SecurityConfig::local(PORT));
    let html = text(check(&app, get("/analyses/larkmoor/data"), StatusCode::OK, "data").await).await;
    assert!(html.contains("larkmoor-districts-with-programme-budgets@1"), "the demo table is stored");
    assert!(html.contains("Not saved yet"));

    // Refit, then save the new analysis with a title, a question and an author.
    let fields = demo_setup_form(&[("transform.vacancy_pct", "log"), ("name", "Log vacancy")]);
    check(&app, post_form("/analyses/larkmoor/refit", &as_refs(&fields)), StatusCode::SEE_OTHER, "refit")
        .await;
    let save = post_form(
        "/analyses/log-vacancy/save",
        &[
            ("title", "Vacancy, logged"),
            ("question", "Where should prevention money go?"),
            ("author", "A. Analyst"),
        ],
    );
    let response = check(&app, save, StatusCode::SEE_OTHER, "save").await;
    assert_eq!(header_of(&response, "location"), "/analyses/log-vacancy/data#save");
    let html = text(check(&app, get("/analyses/log-vacancy/data"), StatusCode::OK, "saved").await).await;
    assert!(html.contains("Saved in the data folder as analyses/log-vacancy.json"));
    let extras = state.get("log-vacancy").expect("lock").expect("analysis").extras().expect("extras");
    assert_eq!(extras.question.as_deref(), Some("Where should prevention money go?"));
    assert_eq!(extras.author.as_deref(), Some("A. Analyst"));

    // The JSON twin returns the saved document.
    let response = check(
        &app,
        post_json("/api/analyses/larkmoor/save", serde_json::json!({"title": "Demo as shipped"})),
        StatusCode::OK,
        "api save",
    )
    .await;
    let saved: SavedAnalysis = serde_json::from_str(&text(response).await).expect("saved analysis");
    assert_eq!(saved.id, "larkmoor");
    assert_eq!(saved.dataset_version, "larkmoor-districts-with-programme-budgets@1");
    assert_eq!(saved.model_spec, demo_spec());
    assert_eq!(saved.cv.folds, 10);
    assert!(!saved.cv.seeds.is_empty());

    let before = fit_of(&state, "log-vacancy");
    drop(app);
    drop(state);

    // A restart: the same fit under the same id, and no second version of the demo table.
    let store = open();
    assert_eq!(store.versions("larkmoor-districts-with-programme-budgets").expect("stored").len(), 1);
    let restarted = demo_state_in_store(store).expect("restart");
    let after = restarted.get("log-vacancy").expect("lock").expect("restored under its saved id");
    assert_eq!(after.fit(), &before, "the restored analysis has the same fit");
    assert_eq!(after.name(), "Vacancy, logged");
    assert_eq!(after.extras().expect("extras").author.as_deref(), Some("A. Analyst"));
    assert_eq!(fit_of(&restarted, DEMO_ID).spec, demo_spec());
    let store = wardcast_store::Store::open(dir.path()).expect("reopen").0;
    assert_eq!(store.versions("larkmoor-districts-with-programme-budgets").expect("stored").len(), 1);
}

#[tokio::test]
async fn user_text_is_escaped_on_the_data_page() {
    let state = AppState::new();
    state.insert(sample_analysis("odd", NASTY, NASTY, NASTY)).expect("insert");
    let app = router(state.clone(), SecurityConfig::local(PORT));
    let html = text(check(&app, get("/analyses/odd/data"), StatusCode::OK, "data").await).await;
    assert!(html.contains(&format!("<code>{NASTY_ESCAPED}</code>")), "the column and key are shown escaped");
    assert!(html.contains(&format!("name=\"transform.{NASTY_ESCAPED}\"")), "field names are escaped");
    assert!(!html.contains(NASTY), "no raw user text");

    // An exclusion of the odd key with an odd reason, then its Data page.
    let request =
        post_form("/analyses/odd/exclude", &[("key", NASTY), ("reason", NASTY), ("then", "effects")]);
    let response = check(&app, request, StatusCode::SEE_OTHER, "exclude odd key").await;
    let id = header_of(&response, "location").trim_start_matches("/analyses/").to_owned();
    let html = text(check(&app, get(&format!("/analyses/{id}/data")), StatusCode::OK, "data").await).await;
    assert!(
        html.contains(&format!("<tr><td><code>{NASTY_ESCAPED}</code></td><td>{NASTY_ESCAPED}</td></tr>"))
    );
    assert!(!html.contains(NASTY));

    // A refused form naming odd text echoes it escaped.
    let unknown = format!("{NASTY}-gone");
    let request = post_form(
        "/analyses/odd/refit",
        &[("response", "assault_rate_per_10k"), ("predictor", &unknown), ("name", NASTY)],
    );
    let html = text(check(&app, request, StatusCode::BAD_REQUEST, "odd refit").await).await;
    assert!(html.contains("The model was not fitted"));
    assert!(html.contains("is not in the table"));
    assert!(
        html.contains(&format!("value=\"{NASTY_ESCAPED}\"")),
        "the name field keeps the odd name, escaped"
    );
    assert!(!html.contains(NASTY));
}

#[tokio::test]
async fn a_same_origin_form_post_with_a_null_origin_is_accepted() {
    // Under `Referrer-Policy: no-referrer` a browser's own form post carries `Origin: null`
    // beside `Sec-Fetch-Site: same-origin`; without that vouching, a null origin is refused.
    let (app, _) = demo_app();
    let cases = [
        (Some("same-origin"), StatusCode::SEE_OTHER),
        (None, StatusCode::FORBIDDEN),
        (Some("cross-site"), StatusCode::FORBIDDEN),
        (Some("same-site"), StatusCode::FORBIDDEN),
    ];
    for (site, expected) in cases {
        let mut b = Request::post("/analyses/larkmoor/exclude")
            .header(header::HOST, HOST)
            .header(header::ORIGIN, "null")
            .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded");
        if let Some(s) = site {
            b = b.header("sec-fetch-site", s);
        }
        let request = b.body(Body::from("key=LK-47&reason=arena")).expect("request");
        check(&app, request, expected, &format!("null origin, Sec-Fetch-Site {site:?}")).await;
    }
}

/// The `scenarios` rows of a brief's CSV tables, as written.
fn scenario_rows(csv: &str) -> Vec<String> {
    csv.lines().filter(|l| l.starts_with("scenarios,")).map(str::to_owned).collect()
}

#[tokio::test]
async fn kept_scenarios_are_saved_as_settings_and_computed_again_by_restore_and_the_command() {
    let dir = tempfile::tempdir().expect("temp dir");
    let open = || wardcast_store::Store::open(dir.path()).expect("the store opens").0;
    let state = demo_state_in_store(open()).expect("the demo loads into the store");
    let app = router(state.clone(), SecurityConfig::local(PORT));

    // Keep a one-area and an all-areas scenario through the page's forms, then save.
    for (fields, what) in [
        (&[("part", "one"), ("area", "LK-20"), ("x.unemployment_pct", "9.5")][..], "keep one area"),
        (
            &[
                ("part", "all"),
                ("shift_column", "unemployment_pct"),
                ("shift_op", "multiply"),
                ("shift_amount", "1.1"),
            ][..],
            "keep all areas",
        ),
    ] {
        check(&app, post_form("/analyses/larkmoor/what-if/keep", fields), StatusCode::SEE_OTHER, what).await;
    }
    let kept = state.get(DEMO_ID).expect("lock").expect("demo").extras().expect("extras").scenarios;
    assert_eq!(kept.len(), 2);
    let save = post_form(
        "/analyses/larkmoor/save",
        &[
            ("title", "Demo with scenarios"),
            ("question", "Where should prevention money go?"),
            ("author", "A. Analyst"),
        ],
    );
    check(&app, save, StatusCode::SEE_OTHER, "save").await;

    // (a) The saved document holds the settings only: exactly these, and no result numbers.
    let saved = open().analysis(DEMO_ID).expect("saved").clone();
    assert_eq!(
        saved.scenario,
        serde_json::json!({
            "candidates": [],
            "kept": [
                {"area": "LK-20", "values": {"unemployment_pct": 9.5}, "shift": null},
                {"area": null, "values": {}, "shift": {"column": "unemployment_pct", "operation": "multiply", "amount": 1.1}},
            ],
        })
    );
    let written = saved.scenario.to_string();
    for result in ["prediction", "interval", "leverage", "fit"] {
        assert!(!written.contains(result), "the saved settings carry no {result}");
    }

    // The web brief's scenario rows: one per kept scenario.
    let web_csv =
        text(check(&app, get("/analyses/larkmoor/tables.csv"), StatusCode::OK, "web tables").await).await;
    let web_rows = scenario_rows(&web_csv);
    assert_eq!(web_rows.len(), 2, "one row per kept scenario");
    assert!(web_rows[0].contains("LK-20"), "the one-area row names its area: {}", web_rows[0]);
    drop(app);
    drop(state);

    // (b) The command briefs the saved analysis with the same scenario rows.
    let out = dir.path().join("x.csv");
    let output = std::process::Command::new(env!("CARGO_BIN_EXE_wardcast"))
        .args(["brief", "--analysis", DEMO_ID, "--data-dir"])
        .arg(dir.path())
        .arg("--out")
        .arg(&out)
        .output()
        .expect("the binary runs");
    assert!(output.status.success(), "brief failed: {}", String::from_utf8_lossy(&output.stderr));
    let cli_csv = std::fs::read_to_string(&out).expect("the CSV is written");
    assert_eq!(scenario_rows(&cli_csv), web_rows);

    // (c) A restart computes the kept scenarios again, equal to the ones kept before.
    let restarted = demo_state_in_store(open()).expect("restart");
    let restored =
        restarted.get(DEMO_ID).expect("lock").expect("restored").extras().expect("extras").scenarios;
    assert_eq!(restored, kept);
    let app = router(restarted, SecurityConfig::local(PORT));
    let kept_json: serde_json::Value = serde_json::from_str(
        &text(check(&app, get("/api/analyses/larkmoor/what-if/kept"), StatusCode::OK, "kept").await).await,
    )
    .expect("json");
    assert_eq!(kept_json.as_array().map(Vec::len), Some(2));
    let csv =
        text(check(&app, get("/analyses/larkmoor/tables.csv"), StatusCode::OK, "restored tables").await)
            .await;
    assert_eq!(scenario_rows(&csv), web_rows);
}

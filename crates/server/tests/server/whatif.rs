//! Router tests of the whatif routes: one-area and all-areas predictions against the engine's
//! own `Fit::predict`, the extrapolation flag, allocations against the engine's `allocate`,
//! the stored allocation, every bad request, and escaping.

use std::collections::HashSet;

use axum::Router;
use axum::body::Body;
use axum::http::{Request, StatusCode, header};
use serde_json::{Value, json};
use wardcast::security::SecurityConfig;
use wardcast::web::{AppState, router};
use wardcast_engine::allocation::{
    AllocationOptions, Basis, BlendWeights, BudgetRow, DistrictInput, ExpectedModel, SimulationOptions,
    allocate,
};
use wardcast_engine::{ColumnData, Matrix, PredictorValue, Table};

use crate::{
    HOST, NASTY, NASTY_ESCAPED, PORT, get, header_of, local_app, post, post_json, sample_analysis, send, text,
};

/// The columns of the sample model, in model order.
const PREDICTORS: [&str; 4] = ["unemployment_pct", "vacancy_pct", "district_type", "streetlight_outages"];

fn post_form(path: &str, body: &str) -> Request<Body> {
    post(path, "application/x-www-form-urlencoded", body.to_owned())
}

/// Sends a request and parses the JSON answer, asserting the status.
async fn json_of(app: &Router, request: Request<Body>, status: StatusCode) -> Value {
    let what = format!("{} {}", request.method(), request.uri());
    let response = send(app, request).await;
    assert_eq!(response.status(), status, "{what}");
    assert_eq!(header_of(&response, "content-type"), "application/json", "{what}");
    serde_json::from_str(&text(response).await).expect("valid JSON")
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("{v} is not a number"))
}

/// Asserts `a` equals `b` to 1e-12, relative to the larger of 1 and |b|.
fn close(what: &str, a: f64, b: f64) {
    assert!((a - b).abs() <= 1e-12 * b.abs().max(1.0), "{what}: {a} against {b}");
}

/// The sample analysis as the router holds it, for computing what the engine says directly.
fn sample() -> wardcast::web::Analysis {
    sample_analysis("demo", "Larkmoor assaults", "streetlight_outages", "LK-33")
}

/// The raw predictor values of an area in the sample table.
fn raw_values(table: &Table, key: &str) -> Vec<(String, PredictorValue)> {
    let row = table.keys().iter().position(|k| k == key).expect("area in table");
    PREDICTORS
        .iter()
        .map(|c| {
            let v = match &table.column(c).expect("column").data {
                ColumnData::Numeric(v) => PredictorValue::Number(v[row].expect("value")),
                ColumnData::Text(v) => PredictorValue::Level(v[row].clone().expect("level")),
            };
            ((*c).to_owned(), v)
        })
        .collect()
}

fn set(values: &mut [(String, PredictorValue)], column: &str, value: PredictorValue) {
    values.iter_mut().find(|(c, _)| c == column).expect("predictor").1 = value;
}

/// Compares a prediction document with an engine prediction.
fn check_prediction(what: &str, doc: &Value, p: &wardcast_engine::Prediction) {
    close(&format!("{what} fit"), num(&doc["fit"]), p.fit);
    close(&format!("{what} se"), num(&doc["se_mean"]), p.se_mean);
    close(&format!("{what} mean low"), num(&doc["mean_interval"]["low"]), p.mean_ci.0);
    close(&format!("{what} mean high"), num(&doc["mean_interval"]["high"]), p.mean_ci.1);
    close(&format!("{what} new low"), num(&doc["new_area_interval"]["low"]), p.pred_int.0);
    close(&format!("{what} new high"), num(&doc["new_area_interval"]["high"]), p.pred_int.1);
}

/// One one-area case: the area, the changed values as JSON, the same changes for the engine.
type OneAreaCase = (&'static str, Value, Vec<(&'static str, PredictorValue)>);

#[tokio::test]
async fn one_area_prediction_equals_the_engine_on_its_own_row() {
    let analysis = sample();
    let fit = analysis.fitted().fit();
    let design = fit.design();
    let table = analysis.table();
    let cases: [OneAreaCase; 3] = [
        ("LK-05", json!({}), vec![]),
        ("LK-05", json!({"unemployment_pct": 9.5}), vec![("unemployment_pct", PredictorValue::Number(9.5))]),
        (
            "LK-20",
            json!({"vacancy_pct": "12.25", "district_type": "mixed"}),
            vec![
                ("vacancy_pct", PredictorValue::Number(12.25)),
                ("district_type", PredictorValue::Level("mixed".into())),
            ],
        ),
    ];
    for (area, values, changes) in cases {
        let doc = json_of(
            &local_app(),
            post_json("/api/analyses/demo/what-if/predict", &json!({"area": area, "values": values})),
            StatusCode::OK,
        )
        .await;
        assert_eq!(doc["kind"], "scenario");
        let one = &doc["one_area"];
        let mut raw = raw_values(table, area);
        for (c, v) in changes {
            set(&mut raw, c, v);
        }
        let row = design.row_for_prediction(&raw).expect("row");
        let p = fit.predict(&Matrix::from_rows(std::slice::from_ref(&row)), None, 0.95).expect("predict");
        check_prediction(&format!("{area} scenario"), &one["prediction"], &p[0]);
        // The current prediction is the engine's prediction on the design row of the fit.
        let i = design.keys().iter().position(|k| k == area).expect("fitted area");
        let now = fit.predict(&Matrix::from_rows(&[design.x().row(i)]), None, 0.95).expect("predict");
        check_prediction(&format!("{area} current"), &one["current"], &now[0]);
        close(&format!("{area} current is the fitted value"), num(&one["current"]["fit"]), fit.fitted()[i]);
        close(&format!("{area} difference"), num(&one["difference"]["estimate"]), p[0].fit - now[0].fit);
        assert!(num(&one["difference"]["interval"]["low"]) <= num(&one["difference"]["estimate"]));
        let changed: Vec<&str> = one["inputs"]
            .as_array()
            .expect("inputs")
            .iter()
            .filter(|i| i["changed"] == true)
            .map(|i| i["column"].as_str().expect("column"))
            .collect();
        assert_eq!(changed.len(), values.as_object().expect("object").len(), "{area}: changed inputs");

        // The page shows the same numbers in its data values.
        let query: String = values
            .as_object()
            .expect("object")
            .iter()
            .map(|(c, v)| format!("&x.{c}={}", v.as_str().map_or_else(|| v.to_string(), str::to_owned)))
            .collect();
        let response = send(&local_app(), get(&format!("/analyses/demo/what-if?area={area}{query}"))).await;
        assert_eq!(response.status(), StatusCode::OK);
        let html = text(response).await;
        for v in [p[0].fit, p[0].mean_ci.0, p[0].mean_ci.1, p[0].pred_int.0, p[0].pred_int.1, now[0].fit] {
            let shown = format!("<data value=\"{v:?}\">");
            assert!(html.contains(&shown), "{area}: the page shows {v:?}");
        }
    }
}

#[tokio::test]
async fn extrapolation_is_flagged_for_extreme_values_and_not_for_observed_rows() {
    let analysis = sample();
    let app = local_app();
    // Every fitted area's own values: never beyond the data, never outside the range.
    for key in analysis.fitted().fit().design().keys() {
        let doc = json_of(
            &app,
            post_json("/api/analyses/demo/what-if/predict", &json!({"area": key})),
            StatusCode::OK,
        )
        .await;
        let x = &doc["one_area"]["extrapolation"];
        assert_eq!(x["beyond_data"], false, "{key}: {x}");
        assert_eq!(x["columns_outside_range"], json!([]), "{key}");
        assert!(num(&x["leverage"]) <= num(&x["max_data_leverage"]), "{key}");
    }
    // (changed values, beyond the data, columns outside the range)
    let cases = [
        (json!({"unemployment_pct": 80}), true, vec!["unemployment_pct"]),
        (json!({"unemployment_pct": 60, "vacancy_pct": 0.01}), true, vec!["unemployment_pct", "vacancy_pct"]),
        (json!({"unemployment_pct": 6.5}), false, vec![]),
    ];
    for (values, beyond, outside) in cases {
        let doc = json_of(
            &app,
            post_json("/api/analyses/demo/what-if/predict", &json!({"area": "LK-05", "values": values})),
            StatusCode::OK,
        )
        .await;
        let x = &doc["one_area"]["extrapolation"];
        assert_eq!(x["beyond_data"], beyond, "{values}: {x}");
        assert_eq!(x["columns_outside_range"], json!(outside), "{values}");
    }
    let html = text(send(&app, get("/analyses/demo/what-if?area=LK-05&x.unemployment_pct=80")).await).await;
    assert!(html.contains("Beyond the data."), "the page warns");
    assert!(html.contains("outside the observed range"), "the page names the value");
    let html = text(send(&app, get("/analyses/demo/what-if?area=LK-05")).await).await;
    assert!(!html.contains("Beyond the data."), "no warning for an observed row");
}

#[tokio::test]
async fn all_areas_shift_equals_the_average_of_the_engine_predictions() {
    let analysis = sample();
    let fit = analysis.fitted().fit();
    let names = fit.design().column_names().to_vec();
    let coef = |name: &str| fit.coefficients()[names.iter().position(|n| n == name).expect("term")];
    let mean_fitted = fit.fitted().iter().sum::<f64>() / fit.fitted().len() as f64;
    // (column, operation, amount, the expected difference of the averages)
    let cases = [
        ("unemployment_pct", "add", -1.0, -coef("unemployment_pct")),
        ("vacancy_pct", "multiply", 2.0, coef("log(vacancy_pct)") * 2f64.ln()),
    ];
    for (column, operation, amount, expected) in cases {
        let doc = json_of(
            &local_app(),
            post_json(
                "/api/analyses/demo/what-if/predict",
                &json!({"shift": {"column": column, "operation": operation, "amount": amount}}),
            ),
            StatusCode::OK,
        )
        .await;
        assert!(doc["one_area"].is_null(), "no one-area scenario was asked for");
        let all = &doc["all_areas"];
        assert_eq!(all["areas"], fit.nobs());
        close(&format!("{column} current average"), num(&all["current"]["fit"]), mean_fitted);
        close(&format!("{column} difference"), num(&all["difference"]["estimate"]), expected);
        close(
            &format!("{column} scenario average"),
            num(&all["scenario"]["fit"]),
            num(&all["current"]["fit"]) + num(&all["difference"]["estimate"]),
        );
        let d = &all["difference"]["interval"];
        assert!(
            num(&d["low"]) < expected && expected < num(&d["high"]),
            "{column}: interval around the estimate"
        );
    }
    // A shift of zero changes nothing and flags nothing.
    let doc = json_of(
        &local_app(),
        post_json(
            "/api/analyses/demo/what-if/predict",
            &json!({"shift": {"column": "unemployment_pct", "operation": "add", "amount": 0}}),
        ),
        StatusCode::OK,
    )
    .await;
    assert_eq!(doc["all_areas"]["beyond_data"], json!([]));
    assert_eq!(num(&doc["all_areas"]["difference"]["estimate"]), 0.0);
    // The page's query gives the same average.
    let html = text(
        send(
            &local_app(),
            get("/analyses/demo/what-if?shift_column=unemployment_pct&shift_op=add&shift_amount=-1"),
        )
        .await,
    )
    .await;
    let shown: f64 = html
        .split("<th scope=\"row\">Difference</th><td><data value=\"")
        .nth(1)
        .and_then(|s| s.split('"').next())
        .and_then(|v| v.parse().ok())
        .expect("the page shows the difference");
    close("the page's difference", shown, -coef("unemployment_pct"));
    assert!(html.contains("lower by 1 percentage point"), "the shift is described");
}

/// The engine's allocation of the sample table with the given options, with the inputs the
/// page reads: every area with residents and incidents whose model row exists or can be built.
fn engine_allocation(
    analysis: &wardcast::web::Analysis,
    opts: &AllocationOptions,
) -> wardcast_engine::allocation::Allocation {
    let fit = analysis.fitted().fit();
    let design = fit.design();
    let table = analysis.table();
    let fitted: HashSet<&str> = design.keys().iter().map(String::as_str).collect();
    let numeric = |name: &str| match &table.column(name).expect("column").data {
        ColumnData::Numeric(v) => v.clone(),
        ColumnData::Text(_) => panic!("{name} is numeric"),
    };
    let (residents, assaults) = (numeric("residents"), numeric("assaults"));
    let mut districts = Vec::new();
    let mut extra = Vec::new();
    for (i, key) in table.keys().iter().enumerate() {
        if !fitted.contains(key.as_str()) {
            let complete = PREDICTORS.iter().all(|c| match &table.column(c).expect("column").data {
                ColumnData::Numeric(v) => v[i].is_some(),
                ColumnData::Text(v) => v[i].is_some(),
            });
            if !complete {
                continue;
            }
            extra.push((key.clone(), design.row_for_prediction(&raw_values(table, key)).expect("row")));
        }
        districts.push(DistrictInput {
            key: key.clone(),
            residents: residents[i].expect("residents"),
            observed: assaults[i].expect("assaults"),
        });
    }
    let model = ExpectedModel { fit, rate_unit: 10_000.0, extra_rows: extra };
    allocate(&districts, &Vec::<BudgetRow>::new(), &model, opts).expect("allocation")
}

#[tokio::test]
async fn allocation_equals_the_engine_and_sums_to_the_total() {
    let state = AppState::new();
    state.insert(sample()).expect("insert");
    let app = router(state.clone(), SecurityConfig::local(PORT));
    let request = json!({
        "total": 2_500_001u64,
        "currency": "EUR",
        "basis": "blend",
        "blend_weights": {"population": 0.25, "observed": 0.25, "expected": 0.5},
        "floor": 10_000,
        "cap": 90_000,
        "draws": 300,
        "seed": 11
    });
    let doc = json_of(&app, post_json("/api/analyses/demo/what-if/allocate", &request), StatusCode::OK).await;
    let engine = engine_allocation(
        &sample(),
        &AllocationOptions {
            total: 2_500_001,
            basis: Basis::Blend(BlendWeights { population: 0.25, observed: 0.25, expected: 0.5 }),
            floor: Some(10_000),
            cap: Some(90_000),
            simulation: SimulationOptions { draws: 300, seed: 11 },
        },
    );
    let rows = doc["districts"].as_array().expect("rows");
    assert_eq!(rows.len(), engine.districts().len());
    let sum: u64 = rows.iter().map(|r| r["proposed"].as_u64().expect("amount")).sum();
    assert_eq!(sum, 2_500_001, "amounts sum exactly to the total");
    for (r, e) in rows.iter().zip(engine.districts()) {
        assert_eq!(r["key"], e.key.as_str());
        assert_eq!(r["proposed"].as_u64(), Some(e.amount), "{}", e.key);
        close(&format!("{} expected share", e.key), num(&r["shares"]["expected"]), e.shares.expected);
        close(&format!("{} blend share", e.key), num(&r["shares"]["blend"]), e.shares.blend.expect("blend"));
        assert_eq!(r["budget_note"], "no current budget", "the sample has no budget column");
    }
    for (r, e) in doc["uncertainty"]["districts"]
        .as_array()
        .expect("ranges")
        .iter()
        .zip(&engine.uncertainty().districts)
    {
        close(&format!("{} share p2.5", e.key), num(&r["share"]["p2_5"]), e.share.p2_5);
        close(&format!("{} share p97.5", e.key), num(&r["share"]["p97_5"]), e.share.p97_5);
    }
    assert_eq!((doc["settings"]["seed"].as_u64(), doc["settings"]["draws"].as_u64()), (Some(11), Some(300)));
    let notes: Vec<&str> = doc["notes"].as_array().expect("notes").iter().filter_map(Value::as_str).collect();
    assert!(notes.iter().any(|n| n.contains("Left out of the allocation: LK-33")), "{notes:?}");
    assert!(notes.iter().any(|n| n.ends_with("labelled EUR.")), "the currency is recorded");

    // The extras hold the allocation, and the latest-allocation route serves it.
    let stored = state.get("demo").expect("state").expect("analysis").extras().expect("extras").allocation;
    let stored = stored.expect("the allocation is stored");
    assert_eq!(stored.districts.iter().map(|r| r.proposed).sum::<u64>(), 2_500_001);
    let latest = json_of(&app, get("/api/analyses/demo/what-if/allocation"), StatusCode::OK).await;
    assert_eq!(latest["settings"], doc["settings"]);

    // The page shows the same amounts, and their sum.
    let html = text(send(&app, get("/analyses/demo/what-if")).await).await;
    let shown: Vec<u64> = html
        .split("<td class=\"whatif-proposed\"><data value=\"")
        .skip(1)
        .map(|s| s.split('"').next().expect("value").parse().expect("whole amount"))
        .collect();
    let json_amounts: Vec<u64> = rows.iter().map(|r| r["proposed"].as_u64().expect("amount")).collect();
    assert_eq!(shown, json_amounts);
    assert!(html.contains("<td class=\"whatif-sum\"><data value=\"2500001\">2,500,001</data>"));
    assert!(html.contains("How much the basis matters."));
}

#[tokio::test]
async fn the_form_stores_the_allocation_and_leads_back_to_the_page() {
    let state = AppState::new();
    state.insert(sample()).expect("insert");
    let app = router(state.clone(), SecurityConfig::local(PORT));
    let form = "total=1000000&currency=%24&basis=population&w_population=&w_observed=&w_expected=&floor=&cap=\
                &draws=200&seed=5&rate_unit=10000&residents_column=residents&incidents_column=assaults&budget_column=";
    let response = send(&app, post_form("/analyses/demo/what-if/allocate", form)).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    assert_eq!(header_of(&response, "location"), "/analyses/demo/what-if?allocation=latest#allocation");
    let doc = state.get("demo").expect("state").expect("analysis").extras().expect("extras").allocation;
    let doc = doc.expect("stored");
    assert_eq!(doc.settings.basis, "population");
    assert_eq!((doc.settings.total, doc.settings.seed, doc.settings.draws), (1_000_000, 5, 200));
    assert_eq!(doc.districts.iter().map(|r| r.proposed).sum::<u64>(), 1_000_000);
    // The form now shows the settings recorded.
    let html = text(send(&app, get("/analyses/demo/what-if?allocation=latest")).await).await;
    assert!(html.contains("name=\"seed\" value=\"5\""));
    assert!(html.contains("<option value=\"population\" selected>"));
    // From another site the cross-site guard refuses the post, and nothing is stored.
    let before = state.get("demo").expect("state").expect("analysis").extras().expect("extras").allocation;
    let bare = Request::post("/analyses/demo/what-if/allocate")
        .header(header::HOST, HOST)
        .header(header::ORIGIN, "http://evil.example")
        .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
        .body(Body::from(form))
        .expect("request");
    assert_eq!(send(&app, bare).await.status(), StatusCode::FORBIDDEN);
    let after = state.get("demo").expect("state").expect("analysis").extras().expect("extras").allocation;
    assert_eq!(before, after);
}

#[tokio::test]
async fn same_seed_same_ranges_other_seed_other_ranges() {
    let app = local_app();
    let run = |seed: u64| json!({"total": 1_000_000, "basis": "expected", "draws": 400, "seed": seed});
    let a = json_of(&app, post_json("/api/analyses/demo/what-if/allocate", &run(3)), StatusCode::OK).await;
    let b = json_of(&app, post_json("/api/analyses/demo/what-if/allocate", &run(3)), StatusCode::OK).await;
    let c = json_of(&app, post_json("/api/analyses/demo/what-if/allocate", &run(4)), StatusCode::OK).await;
    assert_eq!(a["uncertainty"], b["uncertainty"], "same seed, same ranges");
    assert_ne!(a["uncertainty"]["districts"], c["uncertainty"]["districts"], "another seed, other ranges");
    assert_eq!(a["districts"], c["districts"], "the seed does not move the proposal itself");
}

#[tokio::test]
async fn infeasible_floors_and_caps_are_422_with_the_engines_words() {
    let app = local_app();
    // (request fields, phrase of the engine's message)
    let cases = [
        (json!({"floor": 900_000}), "lower the floor or raise the total"),
        (json!({"cap": 10}), "raise the cap or lower the total"),
        (json!({"floor": 500, "cap": 100}), "is above the cap of 100"),
    ];
    for (extra, phrase) in cases {
        let mut request = json!({"total": 1_000_000, "basis": "population", "draws": 100});
        for (k, v) in extra.as_object().expect("object") {
            request[k] = v.clone();
        }
        let body = json_of(
            &app,
            post_json("/api/analyses/demo/what-if/allocate", &request),
            StatusCode::UNPROCESSABLE_ENTITY,
        )
        .await;
        assert!(body["error"].as_str().expect("message").contains(phrase), "{extra}: {body}");
    }
    let response =
        send(&app, post_form("/analyses/demo/what-if/allocate", "total=1000&basis=population&floor=900"))
            .await;
    assert_eq!(response.status(), StatusCode::UNPROCESSABLE_ENTITY);
    assert!(text(response).await.contains("lower the floor or raise the total"));
}

#[tokio::test]
async fn every_bad_request_is_refused_plainly() {
    let app = local_app();
    // Page queries: (query, status, phrase).
    let pages = [
        ("area=NOPE", StatusCode::BAD_REQUEST, "There is no area"),
        ("area=LK-05&x.unemployment_pct=abc", StatusCode::BAD_REQUEST, "must be a number"),
        ("area=LK-05&x.district_type=castle", StatusCode::BAD_REQUEST, "has no level"),
        ("area=LK-05&x.median_income=3", StatusCode::BAD_REQUEST, "is not a predictor"),
        ("shift_column=unemployment_pct&shift_amount=zz", StatusCode::BAD_REQUEST, "must be a number"),
        (
            "shift_column=unemployment_pct&shift_op=divide&shift_amount=1",
            StatusCode::BAD_REQUEST,
            "is not a shift",
        ),
        ("shift_column=district_type&shift_amount=1", StatusCode::BAD_REQUEST, "categorical"),
        ("shift_amount=1", StatusCode::BAD_REQUEST, "Choose the indicator"),
        (
            "shift_column=vacancy_pct&shift_op=multiply&shift_amount=-1",
            StatusCode::BAD_REQUEST,
            "has no prediction",
        ),
        ("area=LK-05&x.vacancy_pct=0", StatusCode::UNPROCESSABLE_ENTITY, "undefined"),
    ];
    for (query, status, phrase) in pages {
        let response = send(&app, get(&format!("/analyses/demo/what-if?{query}"))).await;
        assert_eq!(response.status(), status, "{query}");
        assert!(text(response).await.contains(phrase), "{query}: {phrase}");
    }
    // JSON predictions: (body, status, phrase).
    let predictions = [
        (json!({"area": "NOPE"}), StatusCode::BAD_REQUEST, "There is no area"),
        (
            json!({"area": "LK-05", "values": {"unemployment_pct": "lots"}}),
            StatusCode::BAD_REQUEST,
            "must be a number",
        ),
        (json!({"area": "LK-05", "values": {"nope": 1}}), StatusCode::BAD_REQUEST, "is not a predictor"),
        (json!({}), StatusCode::BAD_REQUEST, "nothing to predict"),
        (json!({"values": {"unemployment_pct": 3}}), StatusCode::BAD_REQUEST, "Give a value for"),
        (json!({"area": "LK-05", "colour": "red"}), StatusCode::BAD_REQUEST, "not valid"),
        (
            json!({"shift": {"column": "unemployment_pct", "operation": "divide", "amount": 1}}),
            StatusCode::BAD_REQUEST,
            "not valid",
        ),
        (json!({"area": "LK-33"}), StatusCode::BAD_REQUEST, "has no value for vacancy_pct"),
        (
            json!({"area": "LK-05", "values": {"vacancy_pct": -2}}),
            StatusCode::UNPROCESSABLE_ENTITY,
            "undefined",
        ),
    ];
    for (body, status, phrase) in predictions {
        let doc = json_of(&app, post_json("/api/analyses/demo/what-if/predict", &body), status).await;
        assert_eq!(doc["status"], status.as_u16());
        assert!(doc["error"].as_str().expect("message").contains(phrase), "{body}: {doc}");
    }
    let broken = json_of(
        &app,
        post("/api/analyses/demo/what-if/predict", "application/json", "{not json"),
        StatusCode::BAD_REQUEST,
    )
    .await;
    assert!(broken["error"].as_str().expect("message").contains("not valid"));
    // Allocation forms: (form, status, phrase).
    let forms = [
        ("total=-5&basis=population", StatusCode::BAD_REQUEST, "zero or more"),
        ("total=lots&basis=population", StatusCode::BAD_REQUEST, "zero or more"),
        ("basis=population", StatusCode::BAD_REQUEST, "Give the budget total"),
        ("total=1000&basis=vibes", StatusCode::BAD_REQUEST, "is not a basis"),
        (
            "total=1000&basis=blend&w_population=x&w_observed=0&w_expected=0",
            StatusCode::BAD_REQUEST,
            "must be a number",
        ),
        (
            "total=1000&basis=blend&w_population=0.5&w_observed=0.5&w_expected=0.5",
            StatusCode::UNPROCESSABLE_ENTITY,
            "sum",
        ),
        ("total=1000&basis=population&floor=10&cap=5", StatusCode::UNPROCESSABLE_ENTITY, "above the cap"),
        ("total=1000&basis=population&floor=ten", StatusCode::BAD_REQUEST, "The floor must be"),
        ("total=1000&basis=population&draws=10", StatusCode::UNPROCESSABLE_ENTITY, "between 100 and 100000"),
        ("total=1000&basis=population&draws=many", StatusCode::BAD_REQUEST, "draws must be"),
        ("total=1000&basis=population&seed=-1", StatusCode::BAD_REQUEST, "seed must be"),
        ("total=1000&basis=population&rate_unit=0", StatusCode::BAD_REQUEST, "rate unit"),
        ("total=1000&basis=population&residents_column=nope", StatusCode::BAD_REQUEST, "There is no column"),
        ("total=1000&basis=population&residents_column=district_type", StatusCode::BAD_REQUEST, "holds text"),
        (
            "total=1000&basis=population&currency=aaaaaaaaaaaaaaaaaaaaaaaaaaaaaaaa",
            StatusCode::BAD_REQUEST,
            "currency",
        ),
        ("total=99999999999999999999&basis=population", StatusCode::BAD_REQUEST, "zero or more"),
        ("total=1000000000000000000&basis=population", StatusCode::BAD_REQUEST, "at most"),
    ];
    for (form, status, phrase) in forms {
        let response = send(&app, post_form("/analyses/demo/what-if/allocate", form)).await;
        assert_eq!(response.status(), status, "{form}");
        let body = text(response).await;
        assert!(body.contains(phrase), "{form}: {phrase} in {body}");
    }
    // JSON allocations.
    let allocations = [
        (json!({"total": -5, "basis": "population"}), StatusCode::BAD_REQUEST, "not valid"),
        (json!({"basis": "population"}), StatusCode::BAD_REQUEST, "not valid"),
        (json!({"total": 100, "basis": "blend"}), StatusCode::BAD_REQUEST, "needs its three weights"),
    ];
    for (body, status, phrase) in allocations {
        let doc = json_of(&app, post_json("/api/analyses/demo/what-if/allocate", &body), status).await;
        assert!(doc["error"].as_str().expect("message").contains(phrase), "{body}: {doc}");
    }
    // Unknown analyses, and no allocation yet.
    assert_eq!(send(&app, get("/analyses/missing/what-if")).await.status(), StatusCode::NOT_FOUND);
    assert_eq!(send(&app, get("/analyses/BAD/what-if")).await.status(), StatusCode::BAD_REQUEST);
    json_of(
        &app,
        post_json("/api/analyses/missing/what-if/predict", &json!({"area": "LK-05"})),
        StatusCode::NOT_FOUND,
    )
    .await;
    json_of(&app, get("/api/analyses/demo/what-if/allocation"), StatusCode::NOT_FOUND).await;
}

#[tokio::test]
async fn user_text_is_escaped_on_the_page() {
    let state = AppState::new();
    state.insert(sample_analysis("nasty", NASTY, NASTY, NASTY)).expect("insert");
    let app = router(state, SecurityConfig::local(PORT));
    let page = send(&app, get("/analyses/nasty/what-if")).await;
    assert_eq!(page.status(), StatusCode::OK);
    let html = text(page).await;
    assert!(html.contains(NASTY_ESCAPED), "the odd column's label is shown escaped");
    assert!(!html.contains(NASTY), "never raw");
    // The odd column as a changed value in the query, and a currency label and a left-out
    // area key in the allocation.
    let query = format!("/analyses/nasty/what-if?area=LK-05&x.{}=1.5", urlencode(NASTY));
    let response = send(&app, get(&query)).await;
    assert_eq!(response.status(), StatusCode::OK);
    let html = text(response).await;
    assert!(!html.contains(NASTY));
    let form = format!("total=1000000&basis=population&draws=100&currency={}", urlencode(NASTY));
    let response = send(&app, post_form("/analyses/nasty/what-if/allocate", &form)).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    let html = text(send(&app, get("/analyses/nasty/what-if")).await).await;
    assert!(
        html.contains(&format!("Left out of the allocation: {NASTY_ESCAPED}")),
        "the left-out key is escaped"
    );
    assert!(html.contains(&format!("{NASTY_ESCAPED} 1,000,000")), "the currency label is escaped");
    assert!(!html.contains(NASTY));
}

fn urlencode(s: &str) -> String {
    s.bytes().map(|b| format!("%{b:02X}")).collect()
}

#[tokio::test]
async fn the_demo_allocation_compares_this_years_budget() {
    let state = wardcast::web::demo::demo_state().expect("demo");
    let app = router(state, SecurityConfig::local(PORT));
    // The defaults: this year's budget total, the budget column, the rate unit of the response.
    let html = text(send(&app, get("/analyses/larkmoor/what-if")).await).await;
    assert!(html.contains("<option value=\"programme_budget\" selected>"));
    assert!(html.contains("name=\"rate_unit\" value=\"10000\""));
    let doc = json_of(
        &app,
        post_json(
            "/api/analyses/larkmoor/what-if/allocate",
            &json!({"total": 4_000_000, "basis": "observed", "draws": 100}),
        ),
        StatusCode::OK,
    )
    .await;
    let none: Vec<&str> = doc["districts"]
        .as_array()
        .expect("rows")
        .iter()
        .filter(|r| r["current_budget"].is_null())
        .map(|r| r["key"].as_str().expect("key"))
        .collect();
    assert_eq!(none, ["LK-07", "LK-58"], "districts without a budget row are marked");
    let unmatched: Vec<&str> = doc["unmatched_budgets"]
        .as_array()
        .expect("list")
        .iter()
        .map(|b| b["key"].as_str().expect("key"))
        .collect();
    assert!(unmatched.contains(&"LK-12"), "the budget of a left-out district is listed: {unmatched:?}");
    let notes = doc["notes"].to_string();
    assert!(notes.contains("LK-7A") && notes.contains("LK-65"), "rows the join could not match are named");
    for r in doc["districts"].as_array().expect("rows") {
        if let (Some(now), Some(change)) = (r["current_budget"].as_i64(), r["change"].as_i64()) {
            assert_eq!(r["proposed"].as_i64().expect("amount") - now, change, "{}", r["key"]);
        }
    }
}

/// The sentence shown wherever a predicted rate or an interval end is below zero.
const NEGATIVE: &str = wardcast_report::brief::text::NEGATIVE_PREDICTION;

/// The demo workspace served locally.
fn demo_app() -> Router {
    router(wardcast::web::demo::demo_state().expect("demo"), SecurityConfig::local(PORT))
}

/// Keeps a scenario through the JSON route and returns the kept list.
async fn keep_json(app: &Router, id: &str, request: Value) -> Vec<Value> {
    let kept =
        json_of(app, post_json(&format!("/api/analyses/{id}/what-if/keep"), &request), StatusCode::CREATED)
            .await;
    kept.as_array().expect("a list").clone()
}

async fn kept_of(app: &Router, id: &str) -> Vec<Value> {
    let kept = json_of(app, get(&format!("/api/analyses/{id}/what-if/kept")), StatusCode::OK).await;
    kept.as_array().expect("a list").clone()
}

#[tokio::test]
async fn kept_scenarios_are_recomputed_listed_and_forgotten() {
    let app = local_app();
    assert!(kept_of(&app, "demo").await.is_empty(), "nothing kept at first");
    // The page form: one area with a changed value; the answer leads back with the settings.
    let response = send(
        &app,
        post_form("/analyses/demo/what-if/keep", "part=one&area=LK-20&x.unemployment_pct=9.5&fit=1000"),
    )
    .await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    assert_eq!(
        header_of(&response, "location"),
        "/analyses/demo/what-if?area=LK-20&x.unemployment_pct=9.5&fit=1000#kept"
    );
    // Every area shifted.
    let response = send(
        &app,
        post_form(
            "/analyses/demo/what-if/keep",
            "part=all&shift_column=unemployment_pct&shift_op=add&shift_amount=-1",
        ),
    )
    .await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    let kept = kept_of(&app, "demo").await;
    assert_eq!(kept.len(), 2);
    // The kept documents equal what the predict route computes: posted numbers are ignored.
    let one = json_of(
        &app,
        post_json(
            "/api/analyses/demo/what-if/predict",
            &json!({"area": "LK-20", "values": {"unemployment_pct": 9.5}}),
        ),
        StatusCode::OK,
    )
    .await;
    assert_eq!(kept[0]["one_area"], one["one_area"]);
    assert!(kept[0]["all_areas"].is_null());
    let all = json_of(
        &app,
        post_json(
            "/api/analyses/demo/what-if/predict",
            &json!({"shift": {"column": "unemployment_pct", "operation": "add", "amount": -1.0}}),
        ),
        StatusCode::OK,
    )
    .await;
    assert_eq!(kept[1]["all_areas"], all["all_areas"]);
    // The page lists both with their numbers and a remove form each.
    let html = text(send(&app, get("/analyses/demo/what-if")).await).await;
    let p = &kept[0]["one_area"]["prediction"];
    for v in [
        &p["fit"],
        &p["mean_interval"]["low"],
        &p["new_area_interval"]["high"],
        &kept[1]["all_areas"]["scenario"]["fit"],
    ] {
        assert!(html.contains(&format!("<data value=\"{:?}\">", num(v))), "the kept list shows {v}");
    }
    assert!(html.contains("LK-20 with unemployment 9.5 instead of"), "the one-area description");
    assert_eq!(html.matches("/what-if/forget\"").count(), 2, "a remove form per kept scenario");
    // Forget the first: the shift is left.
    let response = send(&app, post_form("/analyses/demo/what-if/forget", "index=0")).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    assert_eq!(header_of(&response, "location"), "/analyses/demo/what-if#kept");
    let kept = kept_of(&app, "demo").await;
    assert_eq!(kept.len(), 1);
    assert_eq!(kept[0]["all_areas"], all["all_areas"]);
}

#[tokio::test]
async fn at_most_twenty_scenarios_are_kept_and_the_oldest_go_first() {
    let app = local_app();
    let mut kept = Vec::new();
    for i in 0..23 {
        kept = keep_json(
            &app,
            "demo",
            json!({"area": "LK-05", "values": {"unemployment_pct": 3.0 + f64::from(i)}}),
        )
        .await;
    }
    assert_eq!(kept.len(), 20);
    let first = &kept[0]["one_area"]["inputs"][0];
    assert_eq!(first["column"], "unemployment_pct");
    assert_eq!(num(&first["value"]), 6.0, "the three oldest were dropped");
    assert_eq!(num(&kept[19]["one_area"]["inputs"][0]["value"]), 25.0);
    assert_eq!(kept_of(&app, "demo").await, kept);
}

#[tokio::test]
async fn bad_keep_and_forget_requests_are_answered() {
    let app = local_app();
    keep_json(&app, "demo", json!({"area": "LK-05"})).await;
    // (form route, body, status, words in the answer)
    let cases = [
        ("/analyses/demo/what-if/keep", "part=one&area=LK-99", StatusCode::BAD_REQUEST, "no area"),
        ("/analyses/demo/what-if/keep", "part=one", StatusCode::BAD_REQUEST, "nothing to predict"),
        (
            "/analyses/demo/what-if/keep",
            "part=all&shift_column=unemployment_pct",
            StatusCode::BAD_REQUEST,
            "amount",
        ),
        (
            "/analyses/demo/what-if/keep",
            "part=both&area=LK-05",
            StatusCode::BAD_REQUEST,
            "not a scenario to keep",
        ),
        ("/analyses/demo/what-if/keep", "area=LK-05", StatusCode::BAD_REQUEST, "not a scenario to keep"),
        (
            "/analyses/demo/what-if/keep",
            "part=one&area=LK-05&x.unemployment_pct=lots",
            StatusCode::BAD_REQUEST,
            "not one",
        ),
        ("/analyses/demo/what-if/forget", "index=1", StatusCode::BAD_REQUEST, "no kept scenario number 1"),
        (
            "/analyses/demo/what-if/forget",
            "index=-1",
            StatusCode::BAD_REQUEST,
            "does not name a kept scenario",
        ),
        ("/analyses/demo/what-if/forget", "", StatusCode::BAD_REQUEST, "does not name a kept scenario"),
        ("/analyses/nowhere/what-if/forget", "index=0", StatusCode::NOT_FOUND, "nowhere"),
    ];
    for (path, body, status, words) in cases {
        let response = send(&app, post_form(path, body)).await;
        assert_eq!(response.status(), status, "{path} {body}");
        let page = text(response).await;
        assert!(page.contains(words), "{path} {body}: {page}");
    }
    // JSON keep: unknown area, malformed JSON, unknown field.
    for body in [r#"{"area": "LK-99"}"#, "{", r#"{"area": "LK-05", "fit": 3}"#, "{}"] {
        let response = send(&app, post("/api/analyses/demo/what-if/keep", "application/json", body)).await;
        assert_eq!(response.status(), StatusCode::BAD_REQUEST, "{body}");
        let doc: Value = serde_json::from_str(&text(response).await).expect("JSON error");
        assert_eq!(doc["status"], 400, "{body}");
    }
    // GET on the POST routes, POST on the GET route.
    for path in
        ["/analyses/demo/what-if/keep", "/analyses/demo/what-if/forget", "/api/analyses/demo/what-if/keep"]
    {
        assert_eq!(send(&app, get(path)).await.status(), StatusCode::METHOD_NOT_ALLOWED, "{path}");
    }
    let response = send(&app, post_json("/api/analyses/demo/what-if/kept", &json!({}))).await;
    assert_eq!(response.status(), StatusCode::METHOD_NOT_ALLOWED);
    // A cross-site form post is refused before anything is kept.
    let response = send(
        &app,
        Request::post("/analyses/demo/what-if/keep")
            .header(header::HOST, HOST)
            .header(header::ORIGIN, "http://elsewhere.example")
            .header(header::CONTENT_TYPE, "application/x-www-form-urlencoded")
            .body(Body::from("part=one&area=LK-05"))
            .expect("request"),
    )
    .await;
    assert_eq!(response.status(), StatusCode::FORBIDDEN);
    assert_eq!(kept_of(&app, "demo").await.len(), 1, "nothing was kept or forgotten by a bad request");
}

#[tokio::test]
async fn kept_scenarios_escape_user_text() {
    let state = AppState::new();
    state.insert(sample_analysis("nasty", NASTY, NASTY, NASTY)).expect("insert");
    let app = router(state, SecurityConfig::local(PORT));
    let body = format!("part=one&area=LK-05&x.{}=1.5", urlencode(NASTY));
    let response = send(&app, post_form("/analyses/nasty/what-if/keep", &body)).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    let location = header_of(&response, "location");
    assert!(!location.contains(NASTY), "the redirect is percent-encoded: {location}");
    let html = text(send(&app, get(&location)).await).await;
    assert!(
        html.contains(&format!("LK-05 with {NASTY_ESCAPED} 1.5 instead of")),
        "the description is escaped"
    );
    assert!(!html.contains(NASTY));
    let kept = kept_of(&app, "nasty").await;
    assert_eq!(kept[0]["one_area"]["inputs"][3]["column"], NASTY, "the JSON keeps the text as it is");
}

#[tokio::test]
async fn negative_predictions_are_named_in_one_sentence_and_left_unaltered() {
    let app = demo_app();
    // LK-20's own prediction and its scenario reach below zero.
    let html =
        text(send(&app, get("/analyses/larkmoor/what-if?area=LK-20&x.unemployment_pct=9.5")).await).await;
    assert_eq!(html.matches(NEGATIVE).count(), 1, "one sentence beside the one-area result");
    let doc = json_of(
        &app,
        post_json(
            "/api/analyses/larkmoor/what-if/predict",
            &json!({"area": "LK-20", "values": {"unemployment_pct": 9.5}}),
        ),
        StatusCode::OK,
    )
    .await;
    let low = num(&doc["one_area"]["prediction"]["new_area_interval"]["low"]);
    assert!(low < 0.0, "the demo scenario goes below zero");
    assert!(html.contains(&format!("<data value=\"{low:?}\">")), "the negative end is shown unaltered");
    // LK-02 and the shifted average stay above zero: no sentence.
    let html = text(
        send(
            &app,
            get("/analyses/larkmoor/what-if?area=LK-02&shift_column=unemployment_pct&shift_op=add&shift_amount=-1"),
        )
        .await,
    )
    .await;
    assert!(html.contains("id=\"all-result\""));
    assert!(!html.contains(NEGATIVE), "nothing is below zero for LK-02");
    // Kept, the negative scenario carries the sentence into the kept list.
    keep_json(&app, "larkmoor", json!({"area": "LK-20"})).await;
    let html = text(send(&app, get("/analyses/larkmoor/what-if?area=LK-02")).await).await;
    assert_eq!(html.matches(NEGATIVE).count(), 1, "one sentence under the kept list");
    // The Areas page: the demo's leave-one-out intervals reach below zero.
    let areas = json_of(&app, get("/api/analyses/larkmoor/areas"), StatusCode::OK).await;
    let negative =
        areas["rows"].as_array().expect("rows").iter().any(|r| r["low"].as_f64().is_some_and(|x| x < 0.0));
    let html = text(send(&app, get("/analyses/larkmoor/areas")).await).await;
    assert_eq!(html.contains(NEGATIVE), negative);
    assert!(negative, "the demo has an interval end below zero");
}

//! Router tests of the tables routes: upload, validation report, metadata, confirm, join,
//! derive, starting an analysis, their JSON twins, every bad request, and escaping.

use axum::Router;
use axum::body::Body;
use axum::http::{Request, Response, StatusCode, header};
use serde_json::{Value, json};
use wardcast::security::{Limits, SecurityConfig};
use wardcast::web::{AppState, router};
use wardcast_engine::ColumnData;

use crate::{HOST, NASTY, NASTY_ESCAPED, PORT, check, encode, get, header_of, post, post_json, send, text};

const BOUNDARY: &str = "wardcast-test-boundary";

/// One part of a multipart form: field name, file name (for a file part) and content.
type Part<'a> = (&'a str, Option<&'a str>, &'a [u8]);

fn multipart_body(parts: &[Part<'_>]) -> Vec<u8> {
    let mut body = Vec::new();
    for (name, file, content) in parts {
        body.extend_from_slice(format!("--{BOUNDARY}\r\n").as_bytes());
        match file {
            Some(f) => body.extend_from_slice(
                format!(
                    "Content-Disposition: form-data; name=\"{name}\"; filename=\"{f}\"\r\n\
                     Content-Type: text/csv\r\n\r\n"
                )
                .as_bytes(),
            ),
            None => body.extend_from_slice(
                format!("Content-Disposition: form-data; name=\"{name}\"\r\n\r\n").as_bytes(),
            ),
        }
        body.extend_from_slice(content);
        body.extend_from_slice(b"\r\n");
    }
    body.extend_from_slice(format!("--{BOUNDARY}--\r\n").as_bytes());
    body
}

fn upload(path: &str, parts: &[Part<'_>]) -> Request<Body> {
    post(path, &format!("multipart/form-data; boundary={BOUNDARY}"), multipart_body(parts))
}

fn form(path: &str, fields: &[(&str, &str)]) -> Request<Body> {
    let body: String =
        fields.iter().map(|(k, v)| format!("{}={}", encode(k), encode(v))).collect::<Vec<_>>().join("&");
    post(path, "application/x-www-form-urlencoded", body)
}

async fn json_of(response: Response<Body>) -> Value {
    serde_json::from_str(&text(response).await).expect("JSON body")
}

fn empty_app() -> Router {
    router(AppState::new(), SecurityConfig::local(PORT))
}

/// Uploads the two demo tables through the HTML form; returns their ids.
async fn upload_demo(app: &Router) -> (String, String) {
    let districts = check(
        app,
        upload(
            "/tables",
            &[
                ("file", Some("larkmoor_districts.csv"), wardcast::demo::DISTRICTS_CSV),
                ("name", None, b"Larkmoor districts"),
                ("key", None, b"district_code"),
            ],
        ),
        StatusCode::SEE_OTHER,
        "upload districts",
    )
    .await;
    let budgets = check(
        app,
        upload("/tables", &[("file", Some("larkmoor_budgets.csv"), wardcast::demo::BUDGETS_CSV)]),
        StatusCode::SEE_OTHER,
        "upload budgets (name and key found automatically)",
    )
    .await;
    let id = |r: &Response<Body>| header_of(r, "location").trim_start_matches("/tables/").to_owned();
    (id(&districts), id(&budgets))
}

/// Joins budgets onto districts and derives the rate; returns the joined table's id.
async fn join_and_derive(app: &Router, districts: &str, budgets: &str) -> String {
    let joined = check(
        app,
        form(&format!("/tables/{districts}/join"), &[("with", budgets), ("kind", "left")]),
        StatusCode::SEE_OTHER,
        "join",
    )
    .await;
    let joined = header_of(&joined, "location").trim_start_matches("/tables/").to_owned();
    let derived = check(
        app,
        form(
            &format!("/tables/{joined}/derive"),
            &[
                ("name", "assault_rate_per_10k"),
                ("kind", "rate_per"),
                ("first", "assaults"),
                ("second", "residents"),
                ("per", "10,000"),
                ("label", "assault rate"),
                ("unit", "assault incidents per 10,000 residents"),
            ],
        ),
        StatusCode::SEE_OTHER,
        "derive",
    )
    .await;
    assert_eq!(header_of(&derived, "location"), format!("/tables/{joined}#columns"));
    joined
}

/// Compares two JSON documents: strings, booleans and shapes exactly, numbers to 1e-12
/// (relative to their size when above 1).
fn assert_close(a: &Value, b: &Value, path: &str) {
    match (a, b) {
        (Value::Number(x), Value::Number(y)) => {
            let (x, y) = (x.as_f64().expect("number"), y.as_f64().expect("number"));
            assert!((x - y).abs() <= 1e-12 * y.abs().max(1.0), "{path}: {x} against {y}");
        }
        (Value::Array(x), Value::Array(y)) => {
            assert_eq!(x.len(), y.len(), "{path}: lengths");
            for (i, (p, q)) in x.iter().zip(y).enumerate() {
                assert_close(p, q, &format!("{path}[{i}]"));
            }
        }
        (Value::Object(x), Value::Object(y)) => {
            let keys = |m: &serde_json::Map<String, Value>| m.keys().cloned().collect::<Vec<_>>();
            assert_eq!(keys(x), keys(y), "{path}: fields");
            for (k, p) in x {
                assert_close(p, &y[k], &format!("{path}.{k}"));
            }
        }
        _ => assert_eq!(a, b, "{path}"),
    }
}

#[tokio::test]
async fn the_demo_tables_uploaded_joined_and_derived_fit_the_demo_model_exactly() {
    let state = AppState::new();
    let app = router(state.clone(), SecurityConfig::local(PORT));
    check(&app, get("/tables"), StatusCode::OK, "empty shelf").await;
    let (districts, budgets) = upload_demo(&app).await;
    assert_eq!(districts, "larkmoor-districts");
    assert_eq!(budgets, "larkmoor-budgets");

    // The validation report in words, with the counts the JSON gives.
    let page =
        text(check(&app, get("/tables/larkmoor-districts"), StatusCode::OK, "districts page").await).await;
    for phrase in
        ["What wardcast found", "larkmoor_districts.csv", "Confirm this table", "Join another table"]
    {
        assert!(page.contains(phrase), "the table page says {phrase:?}");
    }
    assert!(page.contains("<data class=\"table-rows\" value=\"64\">64</data>"), "64 rows shown");
    let doc =
        json_of(check(&app, get("/api/tables/larkmoor-districts"), StatusCode::OK, "districts JSON").await)
            .await;
    assert_eq!(doc["rows"], 64);
    assert_eq!(doc["key"], "district_code");
    assert_eq!(doc["import"]["rows"], 64);
    assert_eq!(doc["columns"].as_array().map(Vec::len), Some(13));

    // Metadata edits go through the form.
    check(
        &app,
        form(
            "/tables/larkmoor-districts/columns",
            &[
                ("column", "unemployment_pct"),
                ("label", "unemployment"),
                ("unit", "%"),
                ("role", "indicator"),
                ("source", "Larkmoor Labour Office"),
                ("vintage", "2025"),
            ],
        ),
        StatusCode::SEE_OTHER,
        "describe a column",
    )
    .await;
    let doc = json_of(send(&app, get("/api/tables/larkmoor-districts")).await).await;
    let meta =
        doc["columns"].as_array().and_then(|c| c.iter().find(|c| c["meta"]["column"] == "unemployment_pct"));
    let meta = &meta.expect("column listed")["meta"];
    assert_eq!(
        (meta["label"].as_str(), meta["unit"].as_str(), meta["vintage"].as_i64()),
        (Some("unemployment"), Some("%"), Some(2025))
    );

    let joined = join_and_derive(&app, &districts, &budgets).await;
    let page =
        text(check(&app, get(&format!("/tables/{joined}")), StatusCode::OK, "joined page").await).await;
    assert!(page.contains("was joined with"), "the join is told in words");
    assert!(page.contains("found no partner"), "unmatched budget codes are named");
    assert!(page.contains("assaults per 10000 of residents"), "the derivation is described");
    let doc = json_of(send(&app, get(&format!("/api/tables/{joined}"))).await).await;
    assert_eq!(doc["join"]["kind"], "left");
    assert_eq!(doc["join"]["rows"], 64);
    assert_eq!(doc["join"]["unmatched_right"].as_array().map(Vec::len), Some(2));
    assert_eq!(doc["derived"][0]["derivation"]["per"], 10000.0);

    check(
        &app,
        post(&format!("/api/tables/{joined}/confirm"), "application/json", ""),
        StatusCode::OK,
        "confirm",
    )
    .await;

    // Same data, same model: the fit equals the demo analysis' fit to 1e-12.
    let spec = wardcast::web::demo::demo_spec();
    let created = check(
        &app,
        post_json(&format!("/api/tables/{joined}/analyses"), &json!({"name": "From uploads", "spec": spec})),
        StatusCode::CREATED,
        "start an analysis (JSON)",
    )
    .await;
    let created = json_of(created).await;
    assert_eq!(created["id"], "from-uploads");
    assert_eq!(created["page"], "/analyses/from-uploads");
    let fit = json_of(check(&app, get("/api/analyses/from-uploads/fit"), StatusCode::OK, "fit").await).await;
    let demo = wardcast::web::demo::demo_state().expect("demo");
    let demo_fit = serde_json::to_value(demo.get("larkmoor").expect("lock").expect("demo analysis").fit())
        .expect("fit JSON");
    assert_close(&fit, &demo_fit, "fit");

    // The derived rate equals assaults / residents × 10,000 for every district, computed here
    // from the CSV text.
    let analysis = state.get("from-uploads").expect("lock").expect("the new analysis");
    let table = &analysis.source().table;
    let Some(ColumnData::Numeric(rates)) = table.column("assault_rate_per_10k").map(|c| &c.data) else {
        panic!("the rate is a numeric column");
    };
    let csv = std::str::from_utf8(wardcast::demo::DISTRICTS_CSV).expect("utf-8");
    let mut lines = csv.lines();
    let head: Vec<&str> = lines.next().expect("header").split(',').collect();
    let at = |name: &str| head.iter().position(|h| *h == name).expect("column");
    let (residents, assaults) = (at("residents"), at("assaults"));
    let mut checked = 0;
    for (line, rate) in lines.zip(rates) {
        let cells: Vec<&str> = line.split(',').collect();
        let (r, a) = (cells[residents].parse::<f64>(), cells[assaults].parse::<f64>());
        if let (Ok(r), Ok(a)) = (r, a) {
            let want = a / r * 10_000.0;
            let got = rate.expect("a rate where both counts are present");
            assert!((got - want).abs() <= 1e-12 * want.abs().max(1.0), "{got} against {want}");
            checked += 1;
        }
    }
    assert!(checked >= 60, "rates checked for {checked} districts");
    assert_eq!(table.keys()[0], "LK-01", "rows keep the file's order");

    // The HTML form starts the same model and lands on its Effects page.
    let mut fields = vec![("name", "Form model"), ("response", "assault_rate_per_10k")];
    fields.extend(wardcast::demo::DEFAULT_PREDICTORS.iter().map(|p| ("predictor", *p)));
    let response = check(
        &app,
        form(&format!("/tables/{joined}/analyses"), &fields),
        StatusCode::SEE_OTHER,
        "form analysis",
    )
    .await;
    assert_eq!(header_of(&response, "location"), "/analyses/form-model");
    let form_fit = json_of(send(&app, get("/api/analyses/form-model/fit")).await).await;
    assert_close(&form_fit, &demo_fit, "form fit");
    check(&app, get("/analyses/form-model"), StatusCode::OK, "effects page of the new analysis").await;

    let list = json_of(check(&app, get("/api/tables"), StatusCode::OK, "table list").await).await;
    assert_eq!(list["kind"], "table_list");
    assert_eq!(list["tables"].as_array().map(Vec::len), Some(3));
    let page = text(send(&app, get("/tables")).await).await;
    assert!(page.contains("Larkmoor districts with larkmoor_budgets"), "the joined table is listed");
}

#[tokio::test]
async fn confirming_saves_a_version_with_its_checksum_in_the_store() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (store, _) = wardcast_store::Store::open(dir.path()).expect("store");
    let app = router(AppState::new().with_store(store), SecurityConfig::local(PORT));
    let created = check(
        &app,
        upload(
            "/api/tables",
            &[
                ("file", Some("larkmoor_budgets.csv"), wardcast::demo::BUDGETS_CSV),
                ("name", None, b"Budgets"),
            ],
        ),
        StatusCode::CREATED,
        "JSON upload",
    )
    .await;
    let created = json_of(created).await;
    assert_eq!(created["id"], "budgets");
    assert_eq!(created["confirmed"], Value::Null);
    check(&app, form("/tables/budgets/confirm", &[]), StatusCode::SEE_OTHER, "confirm").await;
    let doc = json_of(send(&app, get("/api/tables/budgets")).await).await;
    assert_eq!(doc["confirmed"]["version_id"], "budgets@1");
    assert_eq!(doc["confirmed"]["version"], 1);
    let checksum = doc["confirmed"]["checksum"].as_str().expect("checksum").to_owned();
    assert!(checksum.starts_with("sha256:") && checksum.len() == 7 + 64, "{checksum}");
    let page = text(send(&app, get("/tables/budgets")).await).await;
    assert!(page.contains("budgets@1") && page.contains(&checksum), "version and checksum shown");

    // An edit clears the confirmation; confirming again saves version 2.
    let meta =
        json!({"column": "programme_budget", "label": "programme budget", "unit": "$", "role": "indicator"});
    let edited = json_of(
        check(&app, post_json("/api/tables/budgets/columns", &meta), StatusCode::OK, "JSON metadata").await,
    )
    .await;
    assert_eq!(edited["confirmed"], Value::Null);
    let again = json_of(send(&app, post("/api/tables/budgets/confirm", "application/json", "")).await).await;
    assert_eq!(again["confirmed"]["version_id"], "budgets@2");
}

#[tokio::test]
async fn a_table_with_blocking_problems_is_reported_but_cannot_be_used() {
    let app = empty_app();
    let csv = b"code,residents,assaults\nA-1,100,3\nA-1,200,4\nA-2,n/a,5\n";
    let response = check(
        &app,
        upload("/tables", &[("file", Some("twice.csv"), csv), ("key", None, b"code")]),
        StatusCode::SEE_OTHER,
        "upload with a repeated key",
    )
    .await;
    assert_eq!(header_of(&response, "location"), "/tables/twice");
    let page = text(check(&app, get("/tables/twice"), StatusCode::OK, "report").await).await;
    assert!(page.contains("Must be fixed"), "blocking problem marked");
    assert!(page.contains("A-1"), "the repeated key is named");
    assert!(!page.contains("Confirm this table"), "no next steps offered");
    let doc = json_of(send(&app, get("/api/tables/twice")).await).await;
    assert_eq!(doc["usable"], false);
    assert_eq!(doc["import"]["can_save"], false);
    check(&app, form("/tables/twice/confirm", &[]), StatusCode::BAD_REQUEST, "confirm refused").await;
}

/// One bad request: what is sent, the status expected, and a name for the case.
struct Bad {
    request: Request<Body>,
    status: StatusCode,
    case: &'static str,
}

fn bad(request: Request<Body>, status: StatusCode, case: &'static str) -> Bad {
    Bad { request, status, case }
}

#[tokio::test]
async fn every_bad_request_gets_a_plain_answer() {
    let app = empty_app();
    let (districts, budgets) = upload_demo(&app).await;
    let joined = join_and_derive(&app, &districts, &budgets).await;
    let t = |rest: &str| format!("/tables/{joined}{rest}");
    let a = |rest: &str| format!("/api/tables/{joined}{rest}");
    let rate = |name: &str, first: &str, second: &str, kind: &str| {
        vec![
            ("name", name.to_owned()),
            ("kind", kind.to_owned()),
            ("first", first.to_owned()),
            ("second", second.to_owned()),
        ]
    };
    let as_form = |path: &str, fields: Vec<(&str, String)>| {
        let fields: Vec<(&str, &str)> = fields.iter().map(|(k, v)| (*k, v.as_str())).collect();
        form(path, &fields)
    };
    let cases = vec![
        bad(
            upload("/tables", &[("name", None, b"no file")]),
            StatusCode::BAD_REQUEST,
            "upload without a file",
        ),
        bad(
            upload("/tables", &[("file", Some(""), b"")]),
            StatusCode::BAD_REQUEST,
            "upload with no file chosen",
        ),
        bad(
            upload("/tables", &[("file", Some("empty.csv"), b"")]),
            StatusCode::UNPROCESSABLE_ENTITY,
            "empty file",
        ),
        bad(
            post("/tables", "multipart/form-data; boundary=x", "garbage"),
            StatusCode::BAD_REQUEST,
            "broken multipart",
        ),
        bad(
            upload("/api/tables", &[("name", None, b"x")]),
            StatusCode::BAD_REQUEST,
            "JSON upload without a file",
        ),
        bad(get("/tables/no-such-table"), StatusCode::NOT_FOUND, "unknown table"),
        bad(get("/tables/Bad%20Id"), StatusCode::BAD_REQUEST, "malformed table id"),
        bad(get("/api/tables/no-such-table"), StatusCode::NOT_FOUND, "unknown table (JSON)"),
        bad(form("/tables/no-such-table/confirm", &[]), StatusCode::NOT_FOUND, "confirm an unknown table"),
        bad(form("/tables/no-such-table/derive", &[]), StatusCode::NOT_FOUND, "derive on an unknown table"),
        bad(
            as_form(&t("/derive"), rate("x", "assaults", "residents", "cube")),
            StatusCode::BAD_REQUEST,
            "unknown derivation",
        ),
        bad(
            as_form(&t("/derive"), rate("x", "assaults", "assaults", "ratio")),
            StatusCode::BAD_REQUEST,
            "derive from one column twice",
        ),
        bad(
            as_form(&t("/derive"), rate("", "assaults", "residents", "ratio")),
            StatusCode::BAD_REQUEST,
            "derive without a name",
        ),
        bad(
            as_form(&t("/derive"), rate("x", "assaults", "", "ratio")),
            StatusCode::BAD_REQUEST,
            "derive with one column",
        ),
        bad(
            as_form(&t("/derive"), rate("x", "assaults", "no_such_column", "ratio")),
            StatusCode::UNPROCESSABLE_ENTITY,
            "derive from an unknown column",
        ),
        bad(
            as_form(&t("/derive"), rate("residents", "assaults", "median_income", "ratio")),
            StatusCode::UNPROCESSABLE_ENTITY,
            "derive over an imported column",
        ),
        bad(
            as_form(&t("/derive"), {
                let mut f = rate("x", "assaults", "residents", "rate_per");
                f.push(("per", "-5".into()));
                f
            }),
            StatusCode::BAD_REQUEST,
            "rate per a negative number",
        ),
        bad(
            as_form(&t("/derive"), {
                let mut f = rate("x", "assaults", "residents", "rate_per");
                f.push(("per", "lots".into()));
                f
            }),
            StatusCode::BAD_REQUEST,
            "rate per a word",
        ),
        bad(
            post_json(&a("/derive"), &json!({"name": "x", "derivation": {"kind": "cube"}})),
            StatusCode::BAD_REQUEST,
            "JSON derive of an unknown kind",
        ),
        bad(form(&t("/join"), &[("with", &joined)]), StatusCode::BAD_REQUEST, "join with itself"),
        bad(
            form(&t("/join"), &[("with", "no-such-table")]),
            StatusCode::BAD_REQUEST,
            "join with an unknown table",
        ),
        bad(form(&t("/join"), &[("with", "")]), StatusCode::BAD_REQUEST, "join with nothing chosen"),
        bad(
            form(&t("/join"), &[("with", &budgets), ("kind", "outer")]),
            StatusCode::BAD_REQUEST,
            "unknown join kind",
        ),
        bad(
            post_json(&a("/join"), &json!({"with": joined})),
            StatusCode::BAD_REQUEST,
            "JSON join with itself",
        ),
        bad(
            post_json(&a("/join"), &json!({"with": budgets, "kind": "cross"})),
            StatusCode::BAD_REQUEST,
            "JSON join of an unknown kind",
        ),
        bad(
            form(
                &t("/analyses"),
                &[
                    ("response", "assault_rate_per_10k"),
                    ("predictor", "assault_rate_per_10k"),
                    ("predictor", "vacancy_pct"),
                ],
            ),
            StatusCode::BAD_REQUEST,
            "response among predictors",
        ),
        bad(
            form(&t("/analyses"), &[("response", "assault_rate_per_10k")]),
            StatusCode::BAD_REQUEST,
            "no predictors",
        ),
        bad(form(&t("/analyses"), &[("predictor", "vacancy_pct")]), StatusCode::BAD_REQUEST, "no response"),
        bad(
            form(&t("/analyses"), &[("response", "assault_rate_per_10k"), ("predictor", "no_such_column")]),
            StatusCode::UNPROCESSABLE_ENTITY,
            "unknown predictor",
        ),
        bad(
            post_json(&a("/analyses"), &json!({"name": "x", "spec": {"response": "assault_rate_per_10k"}})),
            StatusCode::BAD_REQUEST,
            "JSON spec without predictors",
        ),
        bad(
            post(&a("/analyses"), "application/json", "{not json"),
            StatusCode::BAD_REQUEST,
            "malformed JSON",
        ),
        bad(
            form(&t("/columns"), &[("column", "residents"), ("role", "boss")]),
            StatusCode::BAD_REQUEST,
            "unknown role",
        ),
        bad(
            form(
                &t("/columns"),
                &[("column", "residents"), ("role", "population"), ("vintage", "last year")],
            ),
            StatusCode::BAD_REQUEST,
            "vintage not a year",
        ),
        bad(form(&t("/columns"), &[("role", "population")]), StatusCode::BAD_REQUEST, "no column named"),
        bad(
            form(&t("/columns"), &[("column", "borough"), ("role", "indicator")]),
            StatusCode::UNPROCESSABLE_ENTITY,
            "text column as an indicator",
        ),
        bad(
            form(&t("/columns"), &[("column", "nothing_here"), ("role", "indicator")]),
            StatusCode::UNPROCESSABLE_ENTITY,
            "unknown column",
        ),
        bad(
            post_json(&a("/columns"), &json!({"column": "residents"})),
            StatusCode::BAD_REQUEST,
            "JSON metadata without a role",
        ),
    ];
    for Bad { request, status, case } in cases {
        let json = request.uri().path().starts_with("/api/");
        let response = check(&app, request, status, case).await;
        let body = text(response).await;
        if json {
            let v: Value = serde_json::from_str(&body).unwrap_or_else(|_| panic!("{case}: JSON error body"));
            assert_eq!(v["status"], status.as_u16(), "{case}");
            assert!(v["error"].as_str().is_some_and(|e| !e.is_empty()), "{case}: a sentence");
        } else {
            assert!(body.contains("<p>") || body.contains("table-error"), "{case}: a page with the reason");
        }
    }
    // A model the engine refuses answers 422 on the table page itself, with the engine's words.
    let response = check(
        &app,
        form(&t("/analyses"), &[("response", "assault_rate_per_10k"), ("predictor", "no_such_column")]),
        StatusCode::UNPROCESSABLE_ENTITY,
        "refit refused",
    )
    .await;
    let page = text(response).await;
    assert!(
        page.contains("That did not work.") && page.contains("no_such_column"),
        "the message is on the table page"
    );
    assert!(page.contains("Start an analysis from this table"), "the table page is shown again");
}

#[tokio::test]
async fn uploads_over_the_body_limit_get_413() {
    let limits = Limits { body_bytes: 2_000, ..Limits::default() };
    let app = router(AppState::new(), SecurityConfig::local(PORT).with_limits(limits));
    for path in ["/tables", "/api/tables"] {
        check(
            &app,
            upload(path, &[("file", Some("larkmoor_districts.csv"), wardcast::demo::DISTRICTS_CSV)]),
            StatusCode::PAYLOAD_TOO_LARGE,
            path,
        )
        .await;
    }
    let list = json_of(send(&app, get("/api/tables")).await).await;
    assert_eq!(list["tables"].as_array().map(Vec::len), Some(0), "nothing was shelved");
}

#[tokio::test]
async fn a_nasty_column_and_table_name_are_escaped_on_every_tables_page() {
    let app = empty_app();
    let quoted = NASTY.replace('"', "\"\"");
    let csv = format!("code,residents,\"{quoted}\"\nA-1,100,1.5\nA-2,200,2.5\nA-3,300,4\nA-4,250,1\n");
    let response = check(
        &app,
        upload(
            "/tables",
            &[
                ("file", Some("nasty.csv"), csv.as_bytes()),
                ("name", None, NASTY.as_bytes()),
                ("key", None, b"code"),
            ],
        ),
        StatusCode::SEE_OTHER,
        "upload",
    )
    .await;
    let id = header_of(&response, "location").trim_start_matches("/tables/").to_owned();
    let doc = json_of(send(&app, get(&format!("/api/tables/{id}"))).await).await;
    assert_eq!(doc["name"], NASTY, "the JSON keeps the name as given");
    // A second table to join, so the join form lists the nasty name as an option elsewhere.
    check(
        &app,
        upload("/tables", &[("file", Some("other.csv"), b"code,x\nA-1,1\nA-2,2\n")]),
        StatusCode::SEE_OTHER,
        "second",
    )
    .await;
    // A failing form post shows the page again, with the names.
    let refused =
        send(&app, form(&format!("/tables/{id}/columns"), &[("column", "nothing"), ("role", "indicator")]))
            .await;
    assert_eq!(refused.status(), StatusCode::UNPROCESSABLE_ENTITY);
    let refused = text(refused).await;
    for (path, body) in [
        ("/tables".to_owned(), text(send(&app, get("/tables")).await).await),
        (format!("/tables/{id}"), text(send(&app, get(&format!("/tables/{id}"))).await).await),
        ("/tables/other".to_owned(), text(send(&app, get("/tables/other")).await).await),
        ("refused post".to_owned(), refused),
    ] {
        assert!(body.contains(NASTY_ESCAPED), "{path}: the name appears escaped");
        assert!(!body.contains(NASTY), "{path}: the raw name never appears");
    }
}

#[tokio::test]
async fn a_browser_form_post_with_a_null_origin_is_accepted_only_when_same_origin() {
    // Chromium sends `Origin: null` with same-origin form posts under `Referrer-Policy:
    // no-referrer`, and vouches for them with `Sec-Fetch-Site: same-origin`.
    let app = empty_app();
    let browser = |site: &str| {
        Request::post("/tables")
            .header(header::HOST, HOST)
            .header(header::ORIGIN, "null")
            .header("sec-fetch-site", site)
            .header(header::CONTENT_TYPE, format!("multipart/form-data; boundary={BOUNDARY}"))
            .body(Body::from(multipart_body(&[("file", Some("b.csv"), wardcast::demo::BUDGETS_CSV)])))
            .expect("request")
    };
    check(&app, browser("same-origin"), StatusCode::SEE_OTHER, "same-origin form post").await;
    check(&app, browser("cross-site"), StatusCode::FORBIDDEN, "cross-site form post").await;
    let unvouched = Request::post("/tables/b/confirm")
        .header(header::HOST, HOST)
        .header(header::ORIGIN, "null")
        .body(Body::empty())
        .expect("request");
    check(&app, unvouched, StatusCode::FORBIDDEN, "null origin without Sec-Fetch-Site").await;
}

/// The demo district table written as an XLSX workbook: numbers as numbers, text as text.
fn districts_xlsx() -> Vec<u8> {
    let text = std::str::from_utf8(wardcast::demo::DISTRICTS_CSV).expect("utf-8 demo");
    let mut book = rust_xlsxwriter::Workbook::new();
    let sheet = book.add_worksheet();
    for (r, line) in text.lines().enumerate() {
        for (c, cell) in line.split(',').enumerate() {
            let (row, col) = (u32::try_from(r).expect("row"), u16::try_from(c).expect("column"));
            match cell.parse::<f64>() {
                Ok(x) if r > 0 => sheet.write_number(row, col, x).map(|_| ()),
                _ if cell.is_empty() => Ok(()),
                _ => sheet.write_string(row, col, cell).map(|_| ()),
            }
            .expect("cell written");
        }
    }
    book.save_to_buffer().expect("workbook")
}

#[tokio::test]
async fn an_xlsx_upload_models_like_the_same_table_as_csv() {
    let app = empty_app();
    let mut fits = Vec::new();
    for (file, bytes, name) in [
        ("larkmoor_districts.xlsx", districts_xlsx(), "From a workbook"),
        ("larkmoor_districts.csv", wardcast::demo::DISTRICTS_CSV.to_vec(), "From a text file"),
    ] {
        let created = check(
            &app,
            upload(
                "/api/tables",
                &[
                    ("file", Some(file), &bytes),
                    ("name", None, name.as_bytes()),
                    ("key", None, b"district_code"),
                ],
            ),
            StatusCode::CREATED,
            file,
        )
        .await;
        let table = json_of(created).await;
        let id = table["id"].as_str().expect("table id").to_owned();
        assert_eq!(table["rows"], 64, "{file}: every district is read");
        assert_eq!(table["import"]["rows"], 64, "{file}: the import report counts every district");
        let format = if file.ends_with(".xlsx") { "xlsx" } else { "csv" };
        assert_eq!(table["import"]["source"]["format"], format, "{file} is read as {format}");
        let derive = json!({"name": "assault_rate_per_10k",
            "derivation": {"kind": "rate_per", "count": "assaults", "population": "residents", "per": 10000}});
        check(&app, post_json(&format!("/api/tables/{id}/derive"), &derive), StatusCode::OK, "derive").await;
        let spec = wardcast::web::demo::demo_spec();
        let made = json_of(
            check(
                &app,
                post_json(&format!("/api/tables/{id}/analyses"), &json!({"name": name, "spec": spec})),
                StatusCode::CREATED,
                "analysis",
            )
            .await,
        )
        .await;
        let analysis = made["id"].as_str().expect("analysis id").to_owned();
        fits.push(json_of(send(&app, get(&format!("/api/analyses/{analysis}/fit"))).await).await);
    }
    // The workbook and the text file hold the same table, so the fits agree.
    assert_close(&fits[0], &fits[1], "fit from XLSX against fit from CSV");
}

//! Pages: status codes, what the Effects page leads with, the cautions, escaping of
//! user-supplied names, and a snapshot of the Effects page.

use axum::http::StatusCode;
use wardcast::security::SecurityConfig;
use wardcast::web::{Analysis, AnalysisParts, AppState, ColumnInfo, Glossary, Source, router};
use wardcast_contract::cautions::standing_cautions;

use crate::{
    NASTY, NASTY_ESCAPED, PORT, data_numbers, get, header_of, local_app, sample_analysis, sample_fit, send,
    text,
};

/// Fetches a page and checks its status; returns the body.
async fn page(app: &axum::Router, path: &str, expected: StatusCode) -> String {
    let response = send(app, get(path)).await;
    assert_eq!(response.status(), expected, "GET {path}");
    if expected == StatusCode::OK {
        assert_eq!(header_of(&response, "content-type"), "text/html; charset=utf-8", "GET {path}");
    }
    text(response).await
}

#[tokio::test]
async fn each_page_answers_with_its_status() {
    let app = local_app();
    let cases = [
        ("/", StatusCode::OK, "Larkmoor assaults"),
        ("/analyses/demo", StatusCode::OK, "What the model says"),
        ("/analyses/nothing-here", StatusCode::NOT_FOUND, "no analysis called"),
        ("/analyses/Not_An_Id", StatusCode::BAD_REQUEST, "lowercase letters, digits and hyphens"),
        ("/analyses/-demo", StatusCode::BAD_REQUEST, "lowercase letters, digits and hyphens"),
        ("/analyses/demo/", StatusCode::NOT_FOUND, "no page at this address"),
        ("/analyses", StatusCode::NOT_FOUND, "no page at this address"),
        ("/nowhere", StatusCode::NOT_FOUND, "no page at this address"),
    ];
    for (path, status, phrase) in cases {
        let html = page(&app, path, status).await;
        assert!(html.contains(phrase), "GET {path} should mention {phrase:?}");
        assert!(
            html.contains("<link rel=\"stylesheet\" href=\"/assets/style.css\">"),
            "GET {path} is styled"
        );
    }
}

#[tokio::test]
async fn an_empty_session_says_how_to_begin() {
    let app = router(AppState::new(), SecurityConfig::local(PORT));
    let html = page(&app, "/", StatusCode::OK).await;
    assert!(html.contains("There are no analyses yet"));
}

/// Whether the HTML has an attribute like ` onclick=`.
fn has_event_handler(html: &str) -> bool {
    html.match_indices(" on").any(|(i, _)| {
        let rest = &html[i + 3..];
        let name_len = rest.bytes().take_while(u8::is_ascii_lowercase).count();
        name_len > 0 && rest[name_len..].starts_with('=')
    })
}

#[tokio::test]
async fn pages_have_no_inline_script_or_style() {
    let app = local_app();
    for path in ["/", "/analyses/demo", "/analyses/missing"] {
        let html = page(&app, path, send(&app, get(path)).await.status()).await;
        assert!(!html.contains("<script"), "{path} has a script element");
        assert!(!html.contains(" style="), "{path} has a style attribute");
        assert!(!html.contains("<style"), "{path} has a style element");
        assert!(!has_event_handler(&html), "{path} has an inline event handler");
    }
}

#[tokio::test]
async fn the_effects_page_leads_with_comparisons_and_keeps_the_cautions() {
    let html = page(&local_app(), "/analyses/demo", StatusCode::OK).await;
    let doc = sample_fit("streetlight_outages", "LK-33");
    // The comparison sentences come before the fit statistics and the tables.
    let sentence = "Districts one percentage point higher in unemployment, with the other indicators equal, \
                    have on average";
    let at_sentence = html.find(sentence).expect("the unemployment sentence");
    let at_fit = html.find("How well the model fits").expect("fit section");
    let at_tables = html.find("The workings").expect("tables");
    assert!(at_sentence < at_fit && at_fit < at_tables);
    let used = format!("{} of {}", doc.rows_used, doc.rows_used + doc.rows_dropped.len());
    for phrase in [
        "Districts with twice the level of vacant dwellings",
        "group of district type, compared with those in the \u{201c}residential\u{201d} group",
        "of the variation in assault incidents per 10,000 residents",
        used.as_str(),
        "LK-33",
        "missing value in vacancy_pct",
    ] {
        assert!(html.contains(phrase), "the page should contain {phrase:?}");
    }
    // Full-precision values ride along for checking against the JSON.
    assert_page_shows(&html, &doc);
    // The five cautions, in order, in a panel titled as such.
    assert!(html.contains("Read before deciding"));
    let mut last = 0;
    for caution in standing_cautions() {
        let at = html.find(&caution.heading).unwrap_or_else(|| panic!("caution {:?}", caution.heading));
        assert!(at > last, "cautions keep their order");
        last = at;
    }
    // The section route shows where the analyst is and links every section.
    assert!(html.contains("<a href=\"/analyses/demo\" title=\"What the model says, with intervals\" aria-current=\"page\">Effects</a>"));
    assert!(html.contains("<a href=\"/analyses/demo/soundness\" title=\"Whether the model&#39;s assumptions hold\">Soundness</a>"));
    // No significance stars.
    assert!(!html.contains("***"));
}

#[tokio::test]
async fn user_supplied_names_are_escaped_everywhere() {
    let state = AppState::new();
    state.insert(sample_analysis("nasty", NASTY, NASTY, NASTY)).expect("insert");
    let app = router(state, SecurityConfig::local(PORT));
    for path in ["/", "/analyses/nasty"] {
        let html = page(&app, path, StatusCode::OK).await;
        assert!(!html.contains(NASTY), "{path} contains the raw name");
        assert!(!html.contains("<script"), "{path} contains a script tag");
        assert!(html.contains(NASTY_ESCAPED), "{path} shows the escaped name");
    }
    // The JSON API returns the name as data, intact.
    let response = send(&app, get("/api/analyses/nasty/fit")).await;
    assert_eq!(header_of(&response, "content-type"), "application/json");
    let doc: serde_json::Value = serde_json::from_str(&text(response).await).expect("json");
    assert_eq!(doc["rows_dropped"][0]["key"], NASTY);
}

#[tokio::test]
async fn error_pages_escape_what_they_echo() {
    let app = local_app();
    // A path segment that is a valid id but unknown is echoed back in the 404 message.
    let html = page(&app, "/analyses/x-1", StatusCode::NOT_FOUND).await;
    assert!(html.contains("&#34;x-1&#34;"));
}

#[tokio::test]
async fn the_effects_page_snapshot() {
    let html = page(&local_app(), "/analyses/demo", StatusCode::OK).await;
    insta::assert_snapshot!("effects_page", html);
}

/// Checks that the page's coefficient table shows every coefficient of `doc` with full
/// precision: per term, the estimate, standard error, t and the interval, in that order.
fn assert_page_shows(html: &str, doc: &wardcast_contract::fit::FitDocument) {
    let values = data_numbers(html);
    for c in &doc.coefficients {
        let t = c.t_value.as_f64().expect("t defined");
        let row = [c.estimate, c.std_error, t, c.interval.low, c.interval.high];
        let found = values.windows(5).any(|w| w == row);
        assert!(found, "the page shows {} exactly as the API: {row:?}", c.term);
    }
}

#[tokio::test]
async fn the_page_shows_the_engine_fit_that_the_api_serves() {
    use wardcast_contract::spec::ModelSpec;
    use wardcast_engine::{Column, ColumnData, Design, Fit, FitOptions, Table};

    // A small invented table: eight areas, two indicators and a rate.
    let keys: Vec<String> = (1..=8).map(|i| format!("A-{i}")).collect();
    let numeric = |name: &str, xs: [f64; 8]| Column {
        name: name.into(),
        data: ColumnData::Numeric(xs.iter().map(|&x| Some(x)).collect()),
    };
    let table = Table::new(
        keys,
        vec![
            numeric("rate", [12.0, 15.5, 9.8, 20.1, 17.3, 11.0, 22.4, 14.2]),
            numeric("unemployment_pct", [4.0, 6.5, 3.2, 9.1, 7.7, 4.4, 10.2, 5.9]),
            numeric("vacancy_pct", [2.0, 3.1, 1.5, 6.0, 3.9, 2.2, 7.5, 2.8]),
        ],
    )
    .expect("table");
    let spec = ModelSpec::new("rate", ["unemployment_pct", "vacancy_pct"]);
    let design = Design::build(&table, &spec.to_engine().expect("spec")).expect("design");
    let fit = Fit::new(&design, &FitOptions::default()).expect("fit");
    let glossary = Glossary::new("areas")
        .with_column("rate", ColumnInfo::new("incident rate", Some("incidents per 10,000 residents")))
        .with_column("unemployment_pct", ColumnInfo::new("unemployment", Some("%")))
        .with_column("vacancy_pct", ColumnInfo::new("vacancy", Some("%")));
    let doc = wardcast_contract::fit::FitDocument::from_fit(&fit, &spec).expect("document");
    let analysis = Analysis::build(AnalysisParts {
        id: "small".into(),
        name: "Small table".into(),
        glossary,
        source: std::sync::Arc::new(Source::bare("Small table", table)),
        spec,
        parent: None,
    })
    .expect("analysis");
    let state = AppState::new();
    state.insert(analysis).expect("insert");
    let app = router(state, SecurityConfig::local(PORT));

    let html = page(&app, "/analyses/small", StatusCode::OK).await;
    // The API serves the engine's document byte for byte (compared as text, so the check does
    // not depend on how a JSON reader parses floats).
    let response = send(&app, get("/api/analyses/small/fit")).await;
    assert_eq!(text(response).await, serde_json::to_string(&doc).expect("json"));
    assert_page_shows(&html, &doc);
    assert!(html.contains("Areas one percentage point higher in unemployment"));
    assert!(html.contains("<svg"), "the interval chart is drawn");
}

#[tokio::test]
async fn the_demo_starts_fitted_and_described_in_words() {
    use wardcast::web::demo::{DEMO_ID, demo_spec, demo_state};

    let app = router(demo_state().expect("the demo loads"), SecurityConfig::local(PORT));
    let html = page(&app, &format!("/analyses/{DEMO_ID}"), StatusCode::OK).await;

    // The same fit, computed independently of the web layer.
    let table = wardcast::demo::larkmoor_table().expect("demo table");
    let fitted = wardcast::analysis::Fitted::new(&table, &demo_spec()).expect("demo fit");
    let doc = wardcast_contract::fit::FitDocument::from_fit(fitted.fit(), &demo_spec()).expect("document");
    assert_page_shows(&html, &doc);
    let response = send(&app, get(&format!("/api/analyses/{DEMO_ID}/fit"))).await;
    assert_eq!(text(response).await, serde_json::to_string(&doc).expect("json"));

    // One comparison sentence per indicator, using the demo's labels and units.
    for phrase in [
        "Districts one percentage point higher in unemployment, with the other indicators equal, have on average",
        "percentage point higher in residents aged 15–24",
        "percentage point higher in vacant dwellings",
        "higher in licensed alcohol outlets",
        "higher in after-school programme seats",
        "incidents per 10,000 residents per year (95% interval",
    ] {
        assert!(html.contains(phrase), "the demo page should contain {phrase:?}");
    }
    assert!(html.contains("<svg"), "the interval chart is drawn");
    let start = page(&app, "/", StatusCode::OK).await;
    assert!(start.contains(&format!("<a href=\"/analyses/{DEMO_ID}\">Larkmoor demo</a>")));
}

#[tokio::test]
async fn every_asset_in_the_folder_is_compiled_in_and_served() {
    // The fonts go into the PDF brief, not to the browser.
    let folder = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../assets");
    let mut files = Vec::new();
    for entry in std::fs::read_dir(&folder).expect("assets folder") {
        let entry = entry.expect("entry");
        if entry.file_type().expect("type").is_file() {
            files.push(entry.file_name().to_string_lossy().into_owned());
        }
    }
    files.sort();
    let mut embedded: Vec<String> = wardcast::web::assets::ASSETS.iter().map(|a| a.name.to_owned()).collect();
    embedded.sort();
    assert_eq!(files, embedded, "assets/ and the embedded list agree");
    let app = local_app();
    for asset in wardcast::web::assets::ASSETS {
        let on_disk = std::fs::read(folder.join(asset.name)).expect("file");
        let response = send(&app, get(&format!("/assets/{}", asset.name))).await;
        assert_eq!(response.status(), StatusCode::OK, "{}", asset.name);
        assert_eq!(header_of(&response, "content-type"), asset.content_type);
        assert_eq!(text(response).await.into_bytes(), on_disk, "{} is served as it is on disk", asset.name);
    }
    let response = send(&app, get("/assets/../Cargo.toml")).await;
    assert_ne!(response.status(), StatusCode::OK, "no way out of the assets");
}

#[test]
fn new_analyses_never_replace_one_another() {
    // Two refits named alike can be built at the same moment with the same proposed id; the
    // second stored takes the next free one instead of replacing the first.
    let state = AppState::new();
    let proposed = state.fresh_id("Larkmoor refit").expect("id");
    assert_eq!(proposed, "larkmoor-refit");
    let first =
        state.insert_new(sample_analysis(&proposed, "first", "streetlight_outages", "LK-33")).expect("first");
    let second = state
        .insert_new(sample_analysis(&proposed, "second", "streetlight_outages", "LK-33"))
        .expect("second");
    let third =
        state.insert_new(sample_analysis(&proposed, "third", "streetlight_outages", "LK-33")).expect("third");
    assert_eq!(
        (first.id(), second.id(), third.id()),
        ("larkmoor-refit", "larkmoor-refit-2", "larkmoor-refit-3")
    );
    for (id, name) in
        [("larkmoor-refit", "first"), ("larkmoor-refit-2", "second"), ("larkmoor-refit-3", "third")]
    {
        assert_eq!(state.get(id).expect("lock").expect("kept").name(), name);
    }
    assert_eq!(state.fresh_id("Larkmoor refit").expect("id"), "larkmoor-refit-4");
    assert_eq!(state.fresh_id("  ??  ").expect("id"), "analysis");
}

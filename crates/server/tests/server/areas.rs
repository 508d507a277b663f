//! Router tests of the areas routes: statuses, every sort key and each bad request, the
//! numbers against the checks document and independent leave-one-out refits, the JSON against
//! the page, and escaping.

use axum::Router;
use axum::http::StatusCode;
use serde_json::Value;
use wardcast::security::SecurityConfig;
use wardcast::web::router;
use wardcast_contract::checks::Outcome;
use wardcast_engine::{Fit, FitOptions, Matrix};

use super::survey::{data_values, fetch, json, nasty_state};
use crate::{NASTY, NASTY_ESCAPED, PORT, escape_html, local_app};

/// The demo workspace served locally.
fn demo_app() -> Router {
    router(wardcast::web::demo::demo_state().expect("demo"), SecurityConfig::local(PORT))
}

/// The keys of the table rows of the page, in order (as escaped in the page).
fn page_keys(html: &str) -> Vec<String> {
    html.split("<tr class=\"flag-")
        .skip(1)
        .filter_map(|chunk| {
            let start = chunk.find("data-key=\"")? + "data-key=\"".len();
            let end = start + chunk[start..].find('"')?;
            Some(chunk[start..end].to_owned())
        })
        .collect()
}

/// The page's numbers for one area: field → value.
fn page_row(html: &str, key: &str) -> Vec<(String, Option<f64>)> {
    let start = html.find(&format!("data-key=\"{key}\">")).unwrap_or_else(|| panic!("row {key}"));
    let end = start + html[start..].find("</tr>").expect("row end");
    data_values(&html[start..end], "data-field=")
        .into_iter()
        .map(|(a, v)| (a.trim_start_matches("data-field=\"").trim_end_matches('"').to_owned(), v))
        .collect()
}

#[tokio::test]
async fn areas_routes_answer_with_their_status() {
    let app = local_app();
    let cases = [
        ("/analyses/demo/areas", StatusCode::OK, "Observed against expected"),
        ("/analyses/nothing-here/areas", StatusCode::NOT_FOUND, "no analysis called"),
        ("/analyses/Bad_Id/areas", StatusCode::BAD_REQUEST, "lowercase letters"),
        ("/api/analyses/demo/areas", StatusCode::OK, "\"kind\":\"areas\""),
        ("/api/analyses/nothing-here/areas", StatusCode::NOT_FOUND, "\"status\":404"),
        ("/api/analyses/Bad_Id/areas", StatusCode::BAD_REQUEST, "\"status\":400"),
    ];
    for (path, status, phrase) in cases {
        let body = fetch(&app, path, status).await;
        assert!(body.contains(phrase), "GET {path} should mention {phrase:?}");
    }
}

#[tokio::test]
async fn each_bad_sort_request_is_refused_with_a_reason() {
    let app = local_app();
    let cases = [
        ("sort=danger", "sorted by key, name, observed"),
        ("sort=residual&dir=up", "\"asc\" or \"desc\""),
        ("order=residual", "the parameters \"sort\" and \"dir\""),
        // The sample table carries no metadata, so it has no name column.
        ("sort=name", "no name column"),
    ];
    for (query, phrase) in cases {
        for base in ["/analyses/demo/areas", "/api/analyses/demo/areas"] {
            let path = format!("{base}?{query}");
            let body = fetch(&app, &path, StatusCode::BAD_REQUEST).await;
            let phrase = if base.starts_with("/api") {
                phrase.replace('"', "\\\"")
            } else {
                phrase.replace('"', "&#34;")
            };
            assert!(body.contains(&phrase), "GET {path} should say {phrase:?}: {body:.300}");
        }
    }
}

/// The value of a row for a sort key, as the test computes it from the JSON.
fn sort_value(row: &Value, key: &str) -> Option<f64> {
    let field = match key {
        "t" => "studentized_deleted",
        other => other,
    };
    row[field].as_f64()
}

#[tokio::test]
async fn every_sort_key_orders_the_page_and_the_json_both_ways() {
    let app = demo_app();
    let doc = json(&app, "/api/analyses/larkmoor/areas").await;
    let rows = doc["rows"].as_array().expect("rows").clone();
    assert_eq!(rows.len(), 62);
    for key in ["key", "name", "observed", "predicted", "residual", "t", "leverage"] {
        for dir in ["asc", "desc"] {
            let mut expected = rows.clone();
            expected.sort_by(|a, b| {
                let o = match key {
                    "key" | "name" => a[key].as_str().cmp(&b[key].as_str()),
                    _ => {
                        sort_value(a, key).expect("defined").total_cmp(&sort_value(b, key).expect("defined"))
                    }
                };
                let o = if dir == "desc" { o.reverse() } else { o };
                o.then_with(|| a["key"].as_str().cmp(&b["key"].as_str()))
            });
            let want: Vec<&str> = expected.iter().map(|r| r["key"].as_str().expect("key")).collect();
            let html =
                fetch(&app, &format!("/analyses/larkmoor/areas?sort={key}&dir={dir}"), StatusCode::OK).await;
            assert_eq!(page_keys(&html), want, "page sorted by {key} {dir}");
            let sorted = json(&app, &format!("/api/analyses/larkmoor/areas?sort={key}&dir={dir}")).await;
            let got: Vec<&str> = sorted["rows"]
                .as_array()
                .expect("rows")
                .iter()
                .map(|r| r["key"].as_str().expect("key"))
                .collect();
            assert_eq!(got, want, "JSON sorted by {key} {dir}");
            // The current heading links to the other direction and says how it is sorted.
            let other = if dir == "asc" { "desc" } else { "asc" };
            let sorted_word = if dir == "asc" { "ascending" } else { "descending" };
            assert!(
                html.contains(&format!(
                    "aria-sort=\"{sorted_word}\"><a href=\"/analyses/larkmoor/areas?sort={key}&#38;dir={other}\""
                )),
                "heading of {key} {dir}"
            );
        }
    }
    let html = fetch(&app, "/analyses/larkmoor/areas", StatusCode::OK).await;
    let mut keys = page_keys(&html);
    let unsorted = keys.clone();
    keys.sort();
    assert_eq!(unsorted, keys, "by key by default");
}

#[tokio::test]
async fn intervals_match_the_checks_document_and_leave_one_out_refits() {
    let state = wardcast::web::demo::demo_state().expect("demo");
    let analysis = state.get("larkmoor").expect("lock").expect("demo analysis");
    let doc = wardcast::web::areas::areas_document(&analysis).expect("areas");
    let checks = analysis.checks();
    let Outcome::Ok { result: residuals } = &checks.document.residuals else { panic!("residuals") };
    let fit = analysis.fitted().fit();
    let design = fit.design();
    let n = design.nrows();
    let p = design.ncols();
    assert_eq!((doc.n, doc.parameters, doc.df), (n, p, n - p - 1));
    let t_crit = doc.t_critical.as_f64().expect("t crit");
    let t_ref = wardcast_engine::dist::t_quantile(0.975, (n - p - 1) as f64);
    assert!((t_crit - t_ref).abs() < 1e-9, "t(0.975, n−p−1)");
    let close = |what: &str, a: f64, b: f64| {
        assert!((a - b).abs() <= 1e-9 * b.abs().max(1.0), "{what}: {a} vs {b}");
    };
    let mut flagged = 0;
    for (i, row) in doc.rows.iter().enumerate() {
        let check = &residuals.rows[i];
        assert_eq!(row.key, check.key);
        let t = row.studentized_deleted.as_f64().expect("t");
        close(&format!("t of {}", row.key), t, check.studentized_deleted.as_f64().expect("checks t"));
        close(&format!("leverage of {}", row.key), row.leverage, check.hat);
        close(&format!("residual of {}", row.key), row.residual, check.raw);
        // An independent refit without area i, predicting it with the engine.
        let keep: Vec<usize> = (0..n).filter(|&j| j != i).collect();
        let without = Fit::new(&design.select_rows(&keep), &FitOptions::default()).expect("refit");
        let pred =
            &without.predict(&Matrix::from_rows(&[design.x().row(i)]), None, 0.95).expect("predict")[0];
        close(&format!("centre of {}", row.key), row.loo_prediction.as_f64().expect("centre"), pred.fit);
        let (low, high) = (row.low.as_f64().expect("low"), row.high.as_f64().expect("high"));
        close(&format!("low of {}", row.key), low, pred.pred_int.0);
        close(&format!("high of {}", row.key), high, pred.pred_int.1);
        let outside = row.observed < low || row.observed > high;
        assert_eq!(outside, t.abs() > t_crit, "{}: outside ⇔ |t| > t crit", row.key);
        let flag = match (outside, row.residual > 0.0) {
            (true, true) => "higher",
            (true, false) => "lower",
            (false, _) => "within",
        };
        assert_eq!(row.flag, flag, "{}", row.key);
        flagged += usize::from(outside);
    }
    assert_eq!(doc.flagged, flagged);
    assert!(doc.rows.iter().any(|r| r.key == "LK-47" && r.flag == "higher"), "the arena district stands out");
}

#[tokio::test]
async fn the_page_shows_the_json_numbers_and_says_what_chance_gives() {
    let app = demo_app();
    let doc = json(&app, "/api/analyses/larkmoor/areas").await;
    let html = fetch(&app, "/analyses/larkmoor/areas?sort=residual&dir=desc", StatusCode::OK).await;
    for row in doc["rows"].as_array().expect("rows") {
        let key = row["key"].as_str().expect("key");
        let on_page = page_row(&html, key);
        let fields = ["observed", "predicted", "residual", "studentized_deleted", "leverage", "low", "high"];
        assert_eq!(on_page.len(), fields.len(), "{key}");
        for ((field, value), want) in on_page.iter().zip(fields) {
            assert_eq!(field, want, "{key}");
            assert_eq!(*value, row[want].as_f64(), "{key}: {want}");
        }
        let reading = match row["flag"].as_str() {
            Some("higher") => "higher than the indicators predict",
            Some("lower") => "lower than the indicators predict",
            _ => "within its interval",
        };
        let start = html.find(&format!("data-key=\"{key}\">")).expect("row");
        let end = start + html[start..].find("</tr>").expect("end");
        assert!(html[start..end].contains(reading), "{key}: {reading}");
        let name = row["name"].as_str().expect("demo names");
        assert!(
            html[start..end].contains(&format!("<td class=\"name\">{}</td>", escape_html(name))),
            "{key}: name"
        );
    }
    let flagged = doc["flagged"].as_u64().expect("flagged");
    assert!(html.contains(&format!("{flagged} of the 62 districts in the model lie outside their interval")));
    assert!(
        html.contains("about 5% of districts fall outside by chance: with 62 districts, about 3.10 (n/20)")
    );
    assert!(html.contains("They describe no person who"));
    assert!(html.contains("Read before deciding"), "the cautions panel");
    assert!(html.contains("<svg "), "the chart");
    assert!(html.contains("Interval strip of 62 districts"), "the chart's text alternative");
    let t = data_values(&html, "id=\"t-critical\"");
    assert_eq!(t[0].1, doc["t_critical"].as_f64());
    // The page's own text (the standing cautions panel aside) stays neutral and associational.
    let main = &html[html.find("<main").expect("main")..html.find("</main>").expect("main end")];
    for word in ["problem", "hotspot", "drives", "causes", "reduces"] {
        assert!(!main.to_lowercase().contains(word), "neutral wording: {word:?}");
    }
}

#[tokio::test]
async fn user_text_is_escaped_on_the_areas_page() {
    let app = router(nasty_state(), SecurityConfig::local(PORT));
    let html = fetch(&app, "/analyses/nasty/areas?sort=name&dir=desc", StatusCode::OK).await;
    assert!(!html.contains(NASTY), "no raw nasty text");
    assert!(html.contains(&format!("data-key=\"{NASTY_ESCAPED}\"")), "the nasty key, escaped");
    assert!(html.contains(&format!("<td class=\"name\">{NASTY_ESCAPED}</td>")), "the nasty name, escaped");
    assert!(html.contains("&lt;script&gt;"), "the chart escapes the key for SVG");
    let doc = json(&app, "/api/analyses/nasty/areas").await;
    assert_eq!(doc["rows"][0]["key"], NASTY);
    assert_eq!(doc["name_column"], "district_name");
}

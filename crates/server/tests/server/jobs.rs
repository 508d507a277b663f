//! Router tests of the jobs routes: malformed and unknown ids, the running page (refresh header,
//! progress bar, cancel form), cancelling through the form, and the finished page's result link.

use axum::http::StatusCode;

use super::contenders::{demo_app, noise_app, start, wait};
use crate::{get, header_of, post, send, text};

#[tokio::test]
async fn malformed_job_ids_are_bad_requests_and_unknown_ones_are_not_found() {
    let (_, app) = demo_app();
    for (path, status) in [
        ("/jobs/abc", StatusCode::BAD_REQUEST),
        ("/jobs/j12x", StatusCode::BAD_REQUEST),
        ("/api/jobs/x1", StatusCode::BAD_REQUEST),
        ("/jobs/j999", StatusCode::NOT_FOUND),
        ("/api/jobs/j999", StatusCode::NOT_FOUND),
    ] {
        let response = send(&app, get(path)).await;
        assert_eq!(response.status(), status, "{path}");
        let body = text(response).await;
        if path.starts_with("/api/") {
            let doc: serde_json::Value = serde_json::from_str(&body).expect("a JSON error");
            assert_eq!(doc["status"], status.as_u16());
        } else {
            assert!(body.contains("<h1>"), "{path}: an error page");
        }
    }
    let response = send(&app, post("/jobs/j999/cancel", "application/x-www-form-urlencoded", "")).await;
    assert_eq!(response.status(), StatusCode::NOT_FOUND);
}

#[tokio::test]
async fn a_running_job_refreshes_shows_progress_and_can_be_cancelled_by_form() {
    let app = noise_app();
    let candidates: Vec<String> = (0..40).map(|j| format!("x{j:02}")).collect();
    let job = start(&app, "noise", serde_json::json!({ "candidates": candidates, "top": 20 })).await;
    let response = send(&app, get(&format!("/jobs/{job}"))).await;
    assert_eq!(response.status(), StatusCode::OK);
    assert_eq!(header_of(&response, "refresh"), "1");
    let page = text(response).await;
    assert!(page.contains(r#"<progress id="job-progress""#));
    assert!(page.contains("Working"));
    assert!(page.contains(&format!(r#"<form method="post" action="/jobs/{job}/cancel">"#)));

    // A cross-site cancel is refused; a same-origin one leads back to the job page.
    let cross = axum::http::Request::post(format!("/jobs/{job}/cancel"))
        .header("host", crate::HOST)
        .header("origin", "http://evil.example")
        .body(axum::body::Body::empty())
        .expect("request");
    assert_eq!(send(&app, cross).await.status(), StatusCode::FORBIDDEN);
    // A browser under `Referrer-Policy: no-referrer` sends `Origin: null` with the form; it is
    // accepted only together with `Sec-Fetch-Site: same-origin`.
    let null_origin = |site: Option<&str>| {
        let mut b = axum::http::Request::post(format!("/jobs/{job}/cancel"))
            .header("host", crate::HOST)
            .header("origin", "null");
        if let Some(s) = site {
            b = b.header("sec-fetch-site", s);
        }
        b.body(axum::body::Body::empty()).expect("request")
    };
    assert_eq!(send(&app, null_origin(None)).await.status(), StatusCode::FORBIDDEN);
    assert_eq!(send(&app, null_origin(Some("cross-site"))).await.status(), StatusCode::FORBIDDEN);
    assert_eq!(send(&app, null_origin(Some("same-origin"))).await.status(), StatusCode::SEE_OTHER);
    let response =
        send(&app, post(&format!("/jobs/{job}/cancel"), "application/x-www-form-urlencoded", "")).await;
    assert_eq!(response.status(), StatusCode::SEE_OTHER);
    assert_eq!(header_of(&response, "location"), format!("/jobs/{job}"));

    let doc = wait(&app, &job).await;
    let state = doc["state"].as_str().expect("state").to_owned();
    assert!(state == "cancelled" || state == "done", "{doc}");
    let response = send(&app, get(&format!("/jobs/{job}"))).await;
    assert_eq!(header_of(&response, "refresh"), "", "a stopped job does not refresh");
    let page = text(response).await;
    if state == "cancelled" {
        assert!(page.contains("Cancelled after"));
        assert!(!page.contains("/cancel\""), "no cancel button once stopped");
    }
}

#[tokio::test]
async fn a_finished_job_links_its_result_and_the_analysis_lists_it() {
    let (_, app) = demo_app();
    let job = start(
        &app,
        "larkmoor",
        serde_json::json!({ "candidates": ["vacancy_pct", "median_income"], "folds": 4 }),
    )
    .await;
    let doc = wait(&app, &job).await;
    assert_eq!(doc["state"], "done");
    assert_eq!(doc["page"], format!("/jobs/{job}"));
    assert!(doc["seconds"].as_f64().expect("seconds") >= 0.0);
    let response = send(&app, get(&format!("/jobs/{job}"))).await;
    assert_eq!(response.status(), StatusCode::OK);
    assert_eq!(header_of(&response, "refresh"), "");
    let page = text(response).await;
    assert!(page.contains(&format!(
        r#"<a class="button" id="job-result" href="/analyses/larkmoor/contenders?job={job}">"#
    )));
    assert!(page.contains(r#"<progress id="job-progress" max="1000" value="1000">"#), "a full bar");
    assert!(page.contains("Finished in"));
    assert!(page.contains("Read before deciding"), "the job page carries the cautions");
    let page = text(send(&app, get("/analyses/larkmoor/contenders")).await).await;
    assert!(page.contains(&format!(r#"<a href="/jobs/{job}">"#)));
    assert!(page.contains(&format!(r#"<a href="/analyses/larkmoor/contenders?job={job}">result</a>"#)));
}

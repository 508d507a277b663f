//! The command line end to end: the built `wardcast` binary on the bundled demo and on bad input.

use std::process::{Command, Output};

use wardcast_contract::fit::FitDocument;
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::{Design, Fit, FitOptions};

fn wardcast(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_wardcast")).args(args).output().expect("the binary runs")
}

const DEMO_FIT: [&str; 8] = [
    "fit",
    "--demo",
    "--response",
    "assault_rate_per_10k",
    "--predictors",
    "unemployment_pct,vacancy_pct,afterschool_seats_per_100",
    "--transform",
    "vacancy_pct=log",
];

/// Runs a command that must be refused and returns its one-line message.
fn refused(args: &[&str]) -> String {
    let out = wardcast(args);
    assert_eq!(out.status.code(), Some(2), "exit code for {args:?}");
    assert!(out.stdout.is_empty(), "nothing on standard output for {args:?}");
    let err = String::from_utf8(out.stderr).expect("utf-8");
    assert_eq!(err.trim_end().lines().count(), 1, "one line for {args:?}: {err}");
    err.trim_end().to_owned()
}

#[test]
fn fit_on_the_demo_prints_the_engine_numbers_as_json() {
    let out = wardcast(&DEMO_FIT);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let doc: FitDocument = serde_json::from_slice(&out.stdout).expect("a fit document");
    assert_eq!(doc.kind, "fit");
    assert_eq!(doc.schema_version, wardcast_contract::SCHEMA_VERSION);
    // The same model fitted through the library gives the same numbers: the CLI adds nothing.
    let table = wardcast::demo::larkmoor_table().expect("the demo loads");
    let mut spec = ModelSpec::new(
        "assault_rate_per_10k",
        ["unemployment_pct", "vacancy_pct", "afterschool_seats_per_100"],
    );
    spec.predictors[1].transform = Some(wardcast_contract::spec::TransformSpec::Log);
    let design = Design::build(&table, &spec.to_engine().expect("spec")).expect("design");
    let fit = Fit::new(&design, &FitOptions::default()).expect("fit");
    let terms: Vec<&str> = doc.coefficients.iter().map(|c| c.term.as_str()).collect();
    assert_eq!(terms, ["(intercept)", "unemployment_pct", "log(vacancy_pct)", "afterschool_seats_per_100"]);
    for (c, b) in doc.coefficients.iter().zip(fit.coefficients()) {
        assert_eq!(c.estimate, *b);
    }
    assert_eq!(doc.r_squared, fit.r_squared());
    // The demo leaves LK-12's vacancy and LK-38's after-school seats blank (demo/README.md):
    // listwise deletion names both, with the column.
    let dropped: Vec<(&str, &str)> =
        doc.rows_dropped.iter().map(|d| (d.key.as_str(), d.reason.as_str())).collect();
    assert_eq!(
        dropped,
        [("LK-12", "missing value in vacancy_pct"), ("LK-38", "missing value in afterschool_seats_per_100")]
    );
    assert_eq!(doc.rows_used, 62);
    assert_eq!(doc.cautions.len(), 5);
}

#[test]
fn check_and_select_print_their_documents() {
    let mut check = DEMO_FIT;
    check[0] = "check";
    let out = wardcast(&check);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("json");
    assert_eq!(v["kind"], "checks");

    let mut select = DEMO_FIT.to_vec();
    select[0] = "select";
    select.extend(["--group", "borough", "--repeats", "2", "--seed", "7"]);
    let out = wardcast(&select);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("json");
    assert_eq!(v["kind"], "selection");
    assert!(v["notes"].to_string().contains("optimistic"), "the p-value warning travels with the search");
}

#[test]
fn brief_writes_html_with_its_cautions() {
    let dir = tempfile::tempdir().expect("tempdir");
    let out_path = dir.path().join("brief.html");
    let mut args = DEMO_FIT.to_vec();
    args[0] = "brief";
    let out_arg = out_path.to_str().expect("utf-8 path").to_owned();
    args.extend(["--out", &out_arg]);
    let out = wardcast(&args);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let html = std::fs::read_to_string(&out_path).expect("the brief was written");
    assert!(html.contains("Limitations"), "the limitations section is always present");
    assert!(html.contains("Robinson"), "the ecological fallacy is cited");
}

#[test]
fn bad_input_is_refused_with_one_line_and_exit_code_2() {
    // Each case: the arguments, and a part of the message that must be shown.
    let cases: [(&[&str], &str); 6] = [
        (&["fit", "--demo", "--predictors", "vacancy_pct"], "name the response with --response"),
        (&["fit", "--demo", "--response", "assault_rate_per_10k"], "name at least one predictor"),
        (
            &["fit", "--demo", "--response", "assault_rate_per_10k", "--predictors", "no_such_column"],
            "no_such_column",
        ),
        (
            &[
                "fit",
                "--demo",
                "--response",
                "assault_rate_per_10k",
                "--predictors",
                "vacancy_pct",
                "--level",
                "1.5",
            ],
            "strictly between 0 and 1",
        ),
        (
            &[
                "fit",
                "--demo",
                "--response",
                "assault_rate_per_10k",
                "--predictors",
                "vacancy_pct",
                "--transform",
                "vacancy_pct=cube",
            ],
            "use log, reciprocal, sqrt, square or power:<number>",
        ),
        (&["fit", "--response", "y", "--predictors", "x"], "give --data FILE --key COLUMN, or --demo"),
    ];
    for (args, expected) in cases {
        let message = refused(args);
        assert!(message.contains(expected), "{args:?}: {message}");
    }
}

#[test]
fn civil_dates_match_known_days() {
    use wardcast::analysis::civil_date;
    // Day counts since 1970-01-01 checked by hand against the calendar (common practice, no
    // published source): the epoch, the turn of a century, a leap day, and a recent date.
    assert_eq!(civil_date(0), "1970-01-01");
    assert_eq!(civil_date(10_957), "2000-01-01");
    assert_eq!(civil_date(11_016), "2000-02-29");
    assert_eq!(civil_date(20_788), "2026-12-01");
}

//! Tests of the budgeting brief: the HTML snapshot of the demo analysis, the PDF's text and
//! first page, the CSV and XLSX exports with their injection guard, and the limitations
//! section that cannot be left out.
//!
//! The PDF text and render checks call pdftotext and pdftoppm (Debian's poppler-utils), so
//! they are ignored by default and run by `.ci/run` after it installs that package.

mod demo;

use std::path::PathBuf;
use std::process::Command;

use wardcast_report::brief::text::{fmt_coef, fmt_fixed};
use wardcast_report::brief::{
    AllocationRow, AllocationView, Brief, BriefInput, CautionText, Limitations, ScenarioView, SectionKind,
    html, pdf, tables,
};

/// The section headings in their fixed order.
const HEADINGS: [&str; 11] = [
    "1. Decision question",
    "2. Summary in plain words",
    "3. Data",
    "4. Model",
    "5. Results",
    "6. Checks",
    "7. Districts",
    "8. Scenarios and allocation",
    "9. Limitations and cautions",
    "10. Reviewer sign-off",
    "11. Reproducibility appendix",
];

fn demo_brief() -> (BriefInput, Brief) {
    let input = demo::demo_input();
    let brief = Brief::build(&input).expect("the demo brief builds");
    (input, brief)
}

fn positions(text: &str, needles: &[&str]) -> Vec<usize> {
    needles.iter().map(|n| text.find(n).unwrap_or_else(|| panic!("{n:?} is missing"))).collect()
}

/// Asserts what every rendering of the demo brief must say, whatever the format.
fn check_content(format: &str, text: &str, input: &BriefInput) {
    let at = positions(text, &HEADINGS);
    assert!(at.windows(2).all(|w| w[0] < w[1]), "{format}: sections out of order: {at:?}");
    for heading in Limitations::REQUIRED {
        assert!(text.contains(heading), "{format}: the caution {heading:?} is missing");
    }
    for cited in ["Robinson 1950", "Openshaw 1984", "Lum & Isaac 2016", "Ensign et al. 2018"] {
        assert!(text.contains(cited), "{format}: {cited} is not cited");
    }
    assert!(text.contains("licensed professionals"), "{format}: the decision statement is missing");
    for field in ["Reviewer name", "Reviewed for data quality, method and equity"] {
        assert!(text.contains(field), "{format}: the sign-off field {field:?} is missing");
    }
    assert!(
        text.contains("p-values and intervals shown for the chosen model are optimistic"),
        "{format}: no optimism sentence"
    );
    // Every coefficient, its interval and its standard error as printed, equal to the fit document.
    for c in &input.fit.coefficients {
        for value in [c.estimate, c.interval.low, c.interval.high, c.std_error] {
            let shown = fmt_coef(value);
            assert!(text.contains(&shown), "{format}: {} value {shown} is missing", c.term);
            let parsed: f64 = shown.parse().expect("a plain number");
            assert!(
                (parsed - value).abs() <= 5e-4 * value.abs().max(1e-12),
                "{format}: {shown} does not round {value}"
            );
        }
    }
    assert!(text.contains(&fmt_fixed(input.fit.r_squared, 3)), "{format}: R² missing");
    assert!(
        text.contains("higher than the indicators predict") || text.contains("Every district lies within")
    );
    assert!(
        !text.to_lowercase().contains("problem district"),
        "{format}: districts must be described neutrally"
    );
}

#[test]
fn html_brief_of_the_demo_analysis() {
    let (input, brief) = demo_brief();
    let page = html::render(&brief).expect("the HTML renders");
    check_content("html", &page.replace("&amp;", "&").replace("&#39;", "'"), &input);
    // Self-contained: no script, no external resources of any kind.
    for banned in ["<script", "<link", "src=", "href=", "@import", "url(", "<iframe"] {
        assert!(!page.contains(banned), "the HTML contains {banned}");
    }
    let http: Vec<&str> =
        page.match_indices("http").map(|(i, _)| &page[i..(i + 30).min(page.len())]).collect();
    assert!(
        http.iter().all(|h| h.starts_with("http://www.w3.org/2000/svg")),
        "only the SVG namespace may name a URL: {http:?}"
    );
    assert!(page.contains("@page") && page.contains("break-inside: avoid"), "no print stylesheet");
    assert_eq!(
        page.matches("<svg ").count(),
        4,
        "effect plot, residual plot, normal quantile plot, districts"
    );
    insta::with_settings!({ prepend_module_to_snapshot => false, omit_expression => true }, {
        insta::assert_snapshot!("brief_demo_html", page);
    });
}

#[test]
fn user_text_is_escaped_in_the_html() {
    let mut input = demo::demo_input();
    input.question = "<script>alert('x')</script> & \"budget\"".into();
    input.fit.rows[0].key = "<b>LK</b>".into();
    let page = html::render(&Brief::build(&input).expect("builds")).expect("renders");
    assert!(!page.contains("<script>"));
    assert!(!page.contains("<b>LK</b>"));
    assert!(page.contains("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; &quot;budget&quot;"));
}

#[test]
fn the_brief_cannot_be_produced_without_its_limitations() {
    // The section cannot be built empty, with an empty caution, or without a required one.
    assert!(Limitations::new(Vec::new()).is_err());
    let mut items: Vec<CautionText> = Limitations::REQUIRED
        .iter()
        .map(|h| CautionText { heading: (*h).into(), text: "Some text.".into() })
        .collect();
    assert!(Limitations::new(items.clone()).is_ok());
    items[3].text = "   ".into();
    let err = Limitations::new(items.clone()).expect_err("an empty caution is refused");
    assert!(err.to_string().contains("has no text"), "{err}");
    items.remove(3);
    let err = Limitations::new(items).expect_err("a missing caution is refused");
    assert!(err.to_string().contains("lacks the caution"), "{err}");

    // The built brief carries every caution, written for this analysis.
    let (input, brief) = demo_brief();
    assert_eq!(brief.limitations().items().len(), Limitations::REQUIRED.len());
    assert!(brief.limitations().items().iter().all(|c| c.text.len() > 80));
    assert!(
        brief.limitations().items()[0].text.contains("unemployment"),
        "the causation caution names this analysis's indicators"
    );

    // With the section removed, no renderer produces anything.
    let stripped = brief.without_section_for_test(SectionKind::Limitations);
    let message = |e: wardcast_report::ReportError| e.to_string();
    assert!(message(html::render(&stripped).expect_err("HTML refused")).contains("limitations"));
    assert!(
        message(html::render_fragment(&stripped).expect_err("the web page's HTML refused"))
            .contains("limitations")
    );
    assert!(
        message(pdf::render(&stripped, &pdf::PdfOptions::default()).expect_err("PDF refused"))
            .contains("limitations")
    );
    assert!(tables::to_csv(&stripped).is_err());
    assert!(tables::to_xlsx(&stripped).is_err());

    // The input has no switch for it: an unknown field asking to drop it is refused.
    let mut json = serde_json::to_value(&input).expect("serialises");
    json["include_limitations"] = serde_json::Value::Bool(false);
    let refused = serde_json::from_value::<BriefInput>(json);
    assert!(refused.is_err(), "an input that tries to switch the cautions off must be refused");
}

#[test]
fn missing_question_or_author_is_refused() {
    let mut input = demo::demo_input();
    input.question = "  ".into();
    assert!(Brief::build(&input).unwrap_err().to_string().contains("decision question"));
    let mut input = demo::demo_input();
    input.author = String::new();
    assert!(Brief::build(&input).unwrap_err().to_string().contains("author"));
}

const INJECTION: &str = "=HYPERLINK(\"http://x\",\"y\")";

fn injected_input() -> BriefInput {
    let mut input = demo::demo_input();
    input.fit.rows[0].key = INJECTION.into();
    input.fit.rows[1].key = "+cmd|' /C calc'!A0".into();
    input.fit.rows[2].key = "@SUM(1+1)".into();
    input.fit.rows[3].key = "-2+3".into();
    input.fit.rows[4].key = "\tTAB".into();
    input
}

#[test]
fn csv_export_neutralises_formulas_and_keeps_numbers() {
    let input = injected_input();
    let brief = Brief::build(&input).expect("builds");
    let csv = tables::to_csv(&brief).expect("the CSV is written");
    // Text cells that a spreadsheet would run are prefixed with a quote (OWASP CSV injection).
    assert!(
        csv.contains("\"'=HYPERLINK(\"\"http://x\"\",\"\"y\"\")\""),
        "the HYPERLINK cell is not neutralised"
    );
    assert!(csv.contains("'+cmd|' /C calc'!A0"));
    assert!(csv.contains("'@SUM(1+1)"));
    assert!(csv.contains("'-2+3"));
    assert!(csv.contains("'\tTAB"));
    for line in csv.lines() {
        for field in line.split(',') {
            let f = field.trim_start_matches('"');
            assert!(
                !(f.starts_with('=') || f.starts_with('@') || f.starts_with('+')),
                "an unguarded cell: {line}"
            );
        }
    }
    // Numbers stay numbers: the coefficients appear unquoted at full precision, minus signs kept.
    let coef_lines: Vec<&str> = csv.lines().filter(|l| l.starts_with("coefficients,")).collect();
    assert_eq!(coef_lines.len(), input.fit.coefficients.len());
    for (line, c) in coef_lines.iter().zip(&input.fit.coefficients) {
        let fields: Vec<&str> = line.split(',').collect();
        assert_eq!(fields[1], c.term);
        assert_eq!(fields[2].parse::<f64>().expect("a number"), c.estimate, "{line}");
        assert_eq!(fields[3].parse::<f64>().expect("a number"), c.interval.low, "{line}");
    }
    assert!(
        coef_lines.iter().any(|l| l.split(',').nth(2).is_some_and(|f| f.starts_with('-'))),
        "a negative number stays a number"
    );
    // Every table of the brief is in the export.
    for name in [
        "sources",
        "variables",
        "candidates",
        "nested_tests",
        "partial_f",
        "coefficients",
        "fit_statistics",
        "checks",
        "influence",
        "with_without",
        "districts",
        "checksums",
    ] {
        assert!(
            csv.contains(&format!("\r\n{name},")) || csv.starts_with(&format!("{name},")),
            "table {name} missing from the CSV"
        );
    }
}

#[test]
fn xlsx_export_neutralises_formulas_and_keeps_numbers() {
    use calamine::{Data, Reader, Xlsx};
    let input = injected_input();
    let brief = Brief::build(&input).expect("builds");
    let bytes = tables::to_xlsx(&brief).expect("the workbook is written");
    let mut wb: Xlsx<_> = Xlsx::new(std::io::Cursor::new(bytes)).expect("the workbook opens");
    let names = wb.sheet_names();
    assert_eq!(names.len(), brief.tables().len(), "one sheet per table");
    let districts = wb.worksheet_range("districts").expect("a districts sheet");
    let cells: Vec<&Data> = districts.used_cells().map(|(_, _, d)| d).collect();
    assert!(cells.contains(&&Data::String(format!("'{INJECTION}"))), "the HYPERLINK cell is not neutralised");
    assert!(!cells.iter().any(|d| matches!(d, Data::String(s) if s.starts_with('='))));
    let coefs = wb.worksheet_range("coefficients").expect("a coefficients sheet");
    for (i, c) in input.fit.coefficients.iter().enumerate() {
        let row = u32::try_from(i + 1).expect("small");
        assert_eq!(
            coefs.get_value((row, 1)),
            Some(&Data::Float(c.estimate)),
            "estimate of {} is a number",
            c.term
        );
    }
}

#[test]
fn allocation_section_appears_when_run() {
    let mut input = demo::demo_input();
    input.allocation = Some(AllocationView {
        total: 1_000_000.0,
        currency: "marks".into(),
        bases: vec!["population".into(), "observed incidents".into()],
        chosen_basis: "population".into(),
        floor: Some(10_000.0),
        cap: None,
        seed: Some(7),
        draws: Some(2000),
        rows: vec![
            AllocationRow {
                key: "LK-01".into(),
                current_budget: Some(115_850.0),
                shares: vec![0.5, 0.4],
                amount: 500_000.0,
                share_low: Some(0.48),
                share_high: Some(0.52),
            },
            AllocationRow {
                key: "=LK-02".into(),
                current_budget: None,
                shares: vec![0.5, 0.6],
                amount: 500_000.0,
                share_low: None,
                share_high: None,
            },
        ],
        notes: vec![],
    });
    let brief = Brief::build(&input).expect("builds");
    let page = html::render(&brief).expect("renders");
    let at =
        positions(&page, &["7. Districts", "8. Scenarios and allocation", "9. Limitations and cautions"]);
    assert!(at[0] < at[1] && at[1] < at[2]);
    assert!(page.contains("sum exactly to the total"));
    assert!(page.contains("seed 7"));
    assert!(tables::to_csv(&brief).expect("csv").contains("allocation,'=LK-02,"));
    let without = html::render(&Brief::build(&demo::demo_input()).expect("builds")).expect("renders");
    assert!(without.contains("No scenario or allocation was run"));
}

#[test]
fn allocation_view_is_made_from_the_engine_document() {
    use wardcast_engine::allocation::{Basis, BlendWeights};
    let doc = demo::demo_allocation(3_000_000, Basis::Expected);
    let view = AllocationView::from_document(&doc, "marks");
    assert_eq!(view.total, 3_000_000.0);
    assert_eq!(view.currency, "marks");
    assert_eq!(view.bases, ["population", "observed incidents", "model-expected incidents"]);
    assert_eq!(view.chosen_basis, "model-expected incidents");
    assert_eq!((view.floor, view.cap, view.seed, view.draws), (Some(8_000.0), None, Some(2027), Some(500)));
    assert_eq!(view.rows.len(), doc.districts.len());
    assert_eq!(view.rows.iter().map(|r| r.amount).sum::<f64>(), 3_000_000.0, "amounts sum to the total");
    for (row, d) in view.rows.iter().zip(&doc.districts) {
        assert_eq!(row.key, d.key);
        assert_eq!(row.amount, d.proposed as f64);
        assert_eq!(row.current_budget, d.current_budget.map(|b| b as f64));
        assert_eq!(row.shares, [d.shares.population, d.shares.observed, d.shares.expected]);
        let range = doc.uncertainty.districts.iter().find(|r| r.key == d.key).expect("a simulated range");
        assert_eq!((row.share_low, row.share_high), (Some(range.share.p2_5), Some(range.share.p97_5)));
    }
    assert!(view.notes.iter().any(|n| n.contains("does not describe, score or rank any resident")));
    assert!(view.notes.iter().any(|n| n.starts_with("Switching between population and observed incidents")));
    // A basis that does not use the model carries no model range; a blend adds its own shares.
    let population =
        AllocationView::from_document(&demo::demo_allocation(3_000_000, Basis::Population), "marks");
    assert!(population.rows.iter().all(|r| r.share_low.is_none() && r.share_high.is_none()));
    assert!(population.notes.iter().any(|n| n.contains("carry no model uncertainty")));
    let blend = Basis::Blend(BlendWeights { population: 0.5, observed: 0.25, expected: 0.25 });
    let blended = AllocationView::from_document(&demo::demo_allocation(3_000_000, blend), "marks");
    assert_eq!(blended.bases.len(), 4);
    assert!(blended.chosen_basis.contains("population (50%)"));
    assert!(blended.rows.iter().all(|r| r.shares.len() == 4 && r.share_low.is_some()));
    // The section the brief builds from it.
    let mut input = demo::demo_input();
    input.allocation = Some(view);
    let page = html::render(&Brief::build(&input).expect("builds")).expect("renders");
    assert!(page.contains("3,000,000 marks"));
    assert!(page.contains("sum exactly to the total"));
}

#[test]
fn html_brief_can_carry_its_fonts() {
    let (_, brief) = demo_brief();
    let plain = html::render(&brief).expect("renders");
    let options = html::HtmlOptions { fonts: html::Fonts::Embedded };
    let embedded = html::render_with(&brief, &options).expect("renders");
    assert!(!plain.contains("@font-face"), "the default uses the reader's fonts");
    assert_eq!(embedded.matches("@font-face").count(), 2, "regular and bold");
    // A TrueType file starts with the version 0x00010000, which is "AAEAAA" in base64.
    assert_eq!(embedded.matches("src: url(data:font/ttf;base64,AAEAAA").count(), 2);
    let start = embedded.find("base64,").expect("data") + "base64,".len();
    let data = &embedded[start..start + embedded[start..].find(')').expect("end")];
    assert_eq!(data.len() % 4, 0, "padded base64");
    assert!(data.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'+' || b == b'/' || b == b'='));
    let regular = std::fs::read(concat!(env!("CARGO_MANIFEST_DIR"), "/../../assets/fonts/DejaVuSans.ttf"))
        .expect("font");
    assert_eq!(data.len(), regular.len().div_ceil(3) * 4, "the whole regular face");
    // Apart from the fonts, the two documents are the same.
    let without_fonts: String =
        embedded.lines().filter(|l| !l.contains("DejaVu Sans Brief")).collect::<Vec<_>>().join("\n");
    assert_eq!(without_fonts, plain.lines().collect::<Vec<_>>().join("\n"));
    for request in ["src=\"http", "href=\"http", "url(http", "@import"] {
        assert!(!embedded.contains(request), "an external request: {request}");
    }
}

#[test]
fn pdf_is_written_with_embedded_fonts() {
    let (_, brief) = demo_brief();
    let bytes = pdf::render(&brief, &pdf::PdfOptions::default()).expect("the PDF renders");
    assert!(bytes.starts_with(b"%PDF-"), "not a PDF");
    assert!(bytes.len() > 20_000, "implausibly small PDF: {} bytes", bytes.len());
    let letter = pdf::render(&brief, &pdf::PdfOptions { paper: pdf::Paper::Letter }).expect("Letter renders");
    assert!(letter.starts_with(b"%PDF-"));
}

fn artifacts() -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../tests/artifacts");
    std::fs::create_dir_all(&dir).expect("the artifacts folder can be made");
    dir
}

fn write_demo_pdf(name: &str) -> (BriefInput, PathBuf) {
    let (input, brief) = demo_brief();
    let bytes = pdf::render(&brief, &pdf::PdfOptions::default()).expect("the PDF renders");
    let path = artifacts().join(name);
    std::fs::write(&path, bytes).expect("the PDF is written");
    (input, path)
}

fn run(cmd: &mut Command, tool: &str) -> std::process::Output {
    let out = cmd
        .output()
        .unwrap_or_else(|e| panic!("{tool} could not be started ({e}); install Debian's poppler-utils (apt-get install -y poppler-utils)"));
    assert!(out.status.success(), "{tool} failed: {}", String::from_utf8_lossy(&out.stderr));
    out
}

#[test]
#[ignore = "needs pdftotext (poppler-utils): run by .ci/run"]
fn pdf_text_holds_every_section_caution_and_number() {
    let (input, path) = write_demo_pdf("brief-demo.pdf");
    let out = run(Command::new("pdftotext").arg("-enc").arg("UTF-8").arg(&path).arg("-"), "pdftotext");
    let text = String::from_utf8(out.stdout).expect("UTF-8 text");
    // Lines are joined so that a wrapped sentence can be found whole.
    let joined = text.split_whitespace().collect::<Vec<_>>().join(" ");
    check_content("pdf", &joined, &input);
    assert!(joined.contains("Page 1 of"), "no page numbers");
}

#[test]
#[ignore = "needs pdftotext (poppler-utils): run by .ci/run"]
fn pdf_with_an_allocation_shows_its_heading_and_amounts() {
    let doc = demo::demo_allocation(3_000_000, wardcast_engine::allocation::Basis::Expected);
    let mut input = demo::demo_input();
    input.allocation = Some(AllocationView::from_document(&doc, "marks"));
    let brief = Brief::build(&input).expect("builds");
    let path = artifacts().join("brief-allocation.pdf");
    std::fs::write(&path, pdf::render(&brief, &pdf::PdfOptions::default()).expect("renders"))
        .expect("written");
    let out = run(Command::new("pdftotext").arg("-enc").arg("UTF-8").arg(&path).arg("-"), "pdftotext");
    let text = String::from_utf8(out.stdout).expect("UTF-8 text");
    let joined = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(joined.contains("8. Scenarios and allocation"), "no allocation heading");
    assert!(joined.contains("3,000,000 marks"), "no total");
    assert!(joined.contains("Proposed amount"), "no amount column");
    assert!(!joined.contains("No scenario or allocation was run"));
    // Every district's amount is printed as the brief formats it.
    for d in &doc.districts {
        let shown = wardcast_report::brief::text::fmt_amount(d.proposed as f64);
        assert!(joined.contains(&shown), "the amount {shown} of {} is missing", d.key);
    }
}

#[test]
#[ignore = "needs pdftoppm (poppler-utils): run by .ci/run"]
fn pdf_first_page_renders_to_png() {
    let (_, path) = write_demo_pdf("brief-render.pdf");
    let prefix = artifacts().join("brief-page1");
    run(
        Command::new("pdftoppm")
            .args(["-png", "-r", "60", "-f", "1", "-l", "1", "-singlefile"])
            .arg(&path)
            .arg(&prefix),
        "pdftoppm",
    );
    let png = std::fs::read(artifacts().join("brief-page1.png")).expect("page 1 was rendered");
    assert!(png.starts_with(b"\x89PNG"), "not a PNG");
    assert!(png.len() > 5_000, "page 1 looks blank: {} bytes", png.len());
}

/// Two kept scenarios: one area whose single-area interval reaches below zero, and a shifted
/// average beyond the data; the first description starts like a formula.
fn kept_scenarios() -> Vec<ScenarioView> {
    vec![
        ScenarioView {
            description: "=LK-20 with unemployment 9.5 instead of 3.6".into(),
            predicts: "a district with these values".into(),
            predicted: 9.371_607_801_141_712,
            mean_low: 27.046_144_846_336_205,
            mean_high: 45.789_360_448_619_63,
            new_low: Some(-65.553_645_631_389_26),
            new_high: Some(84.296_861_233_672_67),
            beyond_data: false,
            extrapolation: String::new(),
        },
        ScenarioView {
            description: "Every district with unemployment lower by 1 percentage point".into(),
            predicts: "the average over the 62 districts in the model".into(),
            predicted: 53.828_121_989_123_844,
            mean_low: 44.235_312_625_172_36,
            mean_high: 63.420_931_353_075_325,
            new_low: None,
            new_high: None,
            beyond_data: true,
            extrapolation: "beyond the data for 1 of the 62 shifted districts (LK-47)".into(),
        },
    ]
}

#[test]
fn kept_scenarios_appear_before_the_allocation_with_their_intervals() {
    use wardcast_report::brief::text::{NEGATIVE_PREDICTION, fmt_sig};
    let mut input = demo::demo_input();
    let plain = html::render(&Brief::build(&input).expect("builds")).expect("renders");
    let baseline = plain.matches(NEGATIVE_PREDICTION).count();
    input.scenarios = kept_scenarios();
    let brief = Brief::build(&input).expect("builds");
    let page = html::render(&brief).expect("renders");
    let at = positions(
        &page,
        &[
            "7. Districts",
            "8. Scenarios and allocation",
            "What-if scenarios",
            "Kept what-if scenarios",
            "No allocation was run",
            "9. Limitations and cautions",
        ],
    );
    assert!(at.windows(2).all(|w| w[0] < w[1]), "{at:?}");
    assert!(!page.contains("No scenario or allocation was run"));
    assert!(page.contains("are predicted to have the values below"));
    for s in &input.scenarios {
        for v in s.values() {
            assert!(page.contains(&format!(">{}</td>", fmt_sig(v, 4))), "the HTML prints {v}");
        }
    }
    assert!(page.contains("yes: beyond the data for 1 of the 62 shifted districts (LK-47)"));
    // The first scenario reaches below zero: the sentence appears once more than without it.
    assert_eq!(page.matches(NEGATIVE_PREDICTION).count(), baseline + 1);
    // Above zero everywhere: no extra sentence.
    let mut positive = input.clone();
    positive.scenarios[0].new_low = Some(1.5);
    let page = html::render(&Brief::build(&positive).expect("builds")).expect("renders");
    assert_eq!(page.matches(NEGATIVE_PREDICTION).count(), baseline);
    // The exports carry the table, with numbers kept and the formula-like text neutralised.
    let csv = tables::to_csv(&brief).expect("csv");
    let rows: Vec<&str> = csv.lines().filter(|l| l.starts_with("scenarios,")).collect();
    assert_eq!(rows.len(), 2, "{csv}");
    assert!(rows[0].contains("'=LK-20 with unemployment"), "{}", rows[0]);
    assert!(rows[0].contains("9.371607801141712") && rows[0].contains("-65.55364563138926"), "{}", rows[0]);
    assert!(!tables::to_xlsx(&brief).expect("xlsx").is_empty());
    // With an allocation too, the scenarios come first and the allocation follows.
    input.allocation = Some(AllocationView::from_document(
        &demo::demo_allocation(3_000_000, wardcast_engine::allocation::Basis::Expected),
        "marks",
    ));
    let page = html::render(&Brief::build(&input).expect("builds")).expect("renders");
    let at = positions(&page, &["Kept what-if scenarios", "A transparent formula allocation"]);
    assert!(at[0] < at[1]);
    assert!(!page.contains("No allocation was run"));
}

#[test]
fn old_brief_input_without_scenarios_still_reads() {
    let input = demo::demo_input();
    let mut json = serde_json::to_value(&input).expect("serialises");
    json.as_object_mut().expect("object").remove("scenarios");
    let back: BriefInput = serde_json::from_value(json).expect("reads without the field");
    assert_eq!(back, input);
}

#[test]
#[ignore = "needs pdftotext (poppler-utils): run by .ci/run"]
fn pdf_with_kept_scenarios_shows_their_heading_and_numbers() {
    use wardcast_report::brief::text::fmt_sig;
    let mut input = demo::demo_input();
    input.scenarios = kept_scenarios();
    let brief = Brief::build(&input).expect("builds");
    let path = artifacts().join("brief-scenarios.pdf");
    std::fs::write(&path, pdf::render(&brief, &pdf::PdfOptions::default()).expect("renders"))
        .expect("written");
    let out = run(Command::new("pdftotext").arg("-enc").arg("UTF-8").arg(&path).arg("-"), "pdftotext");
    let text = String::from_utf8(out.stdout).expect("UTF-8 text");
    let joined = text.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(joined.contains("What-if scenarios"), "no scenario heading");
    assert!(joined.contains("Kept what-if scenarios"), "no scenario table");
    for s in &input.scenarios {
        for v in s.values() {
            let shown = fmt_sig(v, 4);
            assert!(joined.contains(&shown), "the number {shown} is missing");
        }
    }
}

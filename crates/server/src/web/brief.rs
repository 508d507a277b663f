//! The Brief page: the budgeting brief in the browser and its downloads (PDF, HTML, CSV, XLSX).
//!
//! | Route                                   | What                                                  |
//! |-----------------------------------------|-------------------------------------------------------|
//! | `GET /analyses/{id}/brief`              | the brief inside the app frame, with the form         |
//! | `POST /analyses/{id}/brief`             | stores the decision question and author, 303 back     |
//! | `GET /analyses/{id}/brief.pdf`          | the brief as PDF (attachment)                         |
//! | `GET /analyses/{id}/brief.html`         | the brief as one self-contained HTML file (attachment)|
//! | `GET /analyses/{id}/tables.csv`         | every table of the brief as CSV (attachment)          |
//! | `GET /analyses/{id}/tables.xlsx`        | every table of the brief as a workbook (attachment)   |
//! | `GET /api/analyses/{id}/brief`          | the brief's sections and tables as JSON               |
//!
//! [`brief_input`] is the one way an [`Analysis`] becomes a [`BriefInput`]; `wardcast brief`
//! builds an [`Analysis`] from its flags or a saved analysis and goes through the same function
//! and the same [`render_brief`], so the command line and the web app write the same brief.

use askama::Template;
use axum::Json;
use axum::Router;
use axum::body::Body;
use axum::extract::{Path, State};
use axum::http::{HeaderValue, Request, header};
use axum::response::{IntoResponse, Response};
use axum::routing::get;
use serde::Serialize;
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::checks::ChecksDocument;
use wardcast_contract::dataset::ColumnMeta;
use wardcast_report::ReportError;
use wardcast_report::brief::{AllocationView, Brief, BriefInput, Cell, html, pdf, tables};

use super::forms::{self, FormReading};
use super::pages::{Layout, Section, render};
use super::state::Analysis;
use super::{Ctx, blocking, see_other_to};
use crate::error::{ApiError, Result, ServerError};

/// The longest decision question accepted, in characters.
pub const QUESTION_MAX_CHARS: usize = 600;
/// The longest author name accepted, in characters.
pub const AUTHOR_MAX_CHARS: usize = 120;
/// How the brief form is read: 16 KiB holds both fields fully percent-encoded, with room.
const BRIEF_FORM: FormReading = FormReading {
    limit: 16 * 1024,
    not_a_form: "The brief form must be sent as a web form.",
    unreadable: "The brief form could not be read.",
};

/// The routes of this page.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
        .route("/analyses/{id}/brief", get(page).post(save))
        .route("/analyses/{id}/brief.pdf", get(download_pdf))
        .route("/analyses/{id}/brief.html", get(download_html))
        .route("/analyses/{id}/tables.csv", get(download_csv))
        .route("/analyses/{id}/tables.xlsx", get(download_xlsx))
        .route("/api/analyses/{id}/brief", get(api))
}

/// The file formats of the brief.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum BriefFormat {
    /// The brief as PDF (A4).
    Pdf,
    /// The brief as one self-contained HTML file.
    Html,
    /// Every table of the brief as one CSV file.
    Csv,
    /// Every table of the brief as a workbook, one sheet per table.
    Xlsx,
}

impl BriefFormat {
    /// The format for a file extension (`pdf`, `html`/`htm`, `csv`, `xlsx`), case-insensitive.
    pub fn from_extension(ext: &str) -> Option<Self> {
        match ext.to_ascii_lowercase().as_str() {
            "pdf" => Some(BriefFormat::Pdf),
            "html" | "htm" => Some(BriefFormat::Html),
            "csv" => Some(BriefFormat::Csv),
            "xlsx" => Some(BriefFormat::Xlsx),
            _ => None,
        }
    }

    /// The media type of the file.
    pub fn content_type(self) -> &'static str {
        match self {
            BriefFormat::Pdf => "application/pdf",
            BriefFormat::Html => "text/html; charset=utf-8",
            BriefFormat::Csv => "text/csv; charset=utf-8",
            BriefFormat::Xlsx => "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
        }
    }

    /// The download's file name for an analysis id (ids are lowercase letters, digits and
    /// hyphens, so the name needs no quoting beyond the header's quotes).
    pub fn file_name(self, id: &str) -> String {
        let safe: String = id
            .chars()
            .filter(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || *c == '-')
            .take(64)
            .collect();
        let stem = if safe.is_empty() { "analysis".to_owned() } else { safe };
        match self {
            BriefFormat::Pdf => format!("{stem}-brief.pdf"),
            BriefFormat::Html => format!("{stem}-brief.html"),
            BriefFormat::Csv => format!("{stem}-tables.csv"),
            BriefFormat::Xlsx => format!("{stem}-tables.xlsx"),
        }
    }
}

/// What to do when the analyst has not entered the decision question or their name yet.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MissingDetails {
    /// Refuse: a brief that leaves the analysis is always signed and framed by a question.
    Refuse,
    /// Show a marked placeholder (the preview on the Brief page).
    Placeholder,
}

/// The placeholder question of an unfinished preview.
pub const QUESTION_PLACEHOLDER: &str = "(No decision question entered yet: enter it above.)";
/// The placeholder author of an unfinished preview.
pub const AUTHOR_PLACEHOLDER: &str = "(No author entered yet)";

/// What the brief needs besides the analysis.
#[derive(Debug, Clone)]
pub struct BriefSettings {
    /// The date printed on the brief, `YYYY-MM-DD`.
    pub date: String,
    /// The wardcast version printed on the brief.
    pub wardcast_version: String,
    /// The currency of allocation amounts; `None` takes the unit of the table's budget column
    /// (e.g. "marks"), or "currency units" when there is none.
    pub currency: Option<String>,
    /// What to do without a question or an author.
    pub missing: MissingDetails,
}

impl BriefSettings {
    /// Today's date and this build's version, refusing a brief without question or author.
    pub fn today() -> Self {
        BriefSettings {
            date: crate::analysis::today(),
            wardcast_version: env!("CARGO_PKG_VERSION").to_owned(),
            currency: None,
            missing: MissingDetails::Refuse,
        }
    }
}

/// The currency of the budget column: the unit of the first column whose name mentions a
/// budget, or "currency units".
pub fn budget_currency(columns: &[ColumnMeta]) -> String {
    columns
        .iter()
        .filter(|m| m.column.to_ascii_lowercase().contains("budget"))
        .find_map(|m| m.unit.as_deref().map(str::trim).filter(|u| !u.is_empty()).map(str::to_owned))
        .unwrap_or_else(|| "currency units".to_owned())
}

/// Turns an analysis into the brief's input: its fit document, the checks document, the model
/// choice, the kept what-if scenarios and the allocation from its extras, the column metadata, join report, checksums and
/// notes of its source, and the question and author from its extras. The district
/// predictions are left to the brief, which computes them from the fit document.
///
/// # Errors
/// [`ServerError::BadRequest`] when the question or author is missing and `settings.missing`
/// says to refuse.
pub fn brief_input(
    analysis: &Analysis,
    checks: &ChecksDocument,
    settings: &BriefSettings,
) -> Result<BriefInput> {
    let extras = analysis.extras()?;
    let source = analysis.source();
    let entered = |v: Option<String>| v.map(|s| s.trim().to_owned()).filter(|s| !s.is_empty());
    let (question, author) = match (entered(extras.question), entered(extras.author), settings.missing) {
        (Some(q), Some(a), _) => (q, a),
        (q, a, MissingDetails::Placeholder) => (
            q.unwrap_or_else(|| QUESTION_PLACEHOLDER.to_owned()),
            a.unwrap_or_else(|| AUTHOR_PLACEHOLDER.to_owned()),
        ),
        (None, _, MissingDetails::Refuse) => {
            return Err(ServerError::BadRequest(
                "The brief needs the decision question it answers: enter it on the Brief page first.".into(),
            ));
        }
        (_, None, MissingDetails::Refuse) => {
            return Err(ServerError::BadRequest(
                "The brief needs the name of the analyst who prepared it: enter it on the Brief page first."
                    .into(),
            ));
        }
    };
    let currency = settings.currency.clone().unwrap_or_else(|| budget_currency(&source.columns));
    Ok(BriefInput {
        question,
        author,
        date: settings.date.clone(),
        wardcast_version: settings.wardcast_version.clone(),
        fit: analysis.fit().clone(),
        checks: Some(checks.clone()),
        model_choice: extras.model_choice,
        allocation: extras.allocation.as_ref().map(|doc| AllocationView::from_document(doc, &currency)),
        scenarios: extras
            .scenarios
            .iter()
            .flat_map(|doc| super::whatif::brief_scenarios(analysis, doc))
            .collect(),
        columns: source.columns.clone(),
        join: source.join.clone(),
        checksums: source.checksums.clone(),
        data_notes: source.notes.clone(),
        district_predictions: Vec::new(),
        counts_from_enforcement: true,
    })
}

/// A report failure as a server error: a brief that cannot be written from what the analyst
/// gave is a bad request; anything else is internal.
fn report_error(e: ReportError) -> ServerError {
    match e {
        ReportError::Brief { .. } => {
            let text = e.to_string();
            let mut chars = text.chars();
            let sentence: String =
                chars.next().map(|c| c.to_uppercase().chain(chars).collect()).unwrap_or_default();
            ServerError::BadRequest(format!("{sentence}."))
        }
        other => ServerError::Internal(format!("the brief could not be rendered: {other}")),
    }
}

/// Builds the brief and writes it in `format`. Blocking (charts, PDF layout).
///
/// # Errors
/// When the brief cannot be built or rendered.
pub fn render_brief(input: &BriefInput, format: BriefFormat) -> Result<Vec<u8>> {
    let brief = Brief::build(input).map_err(report_error)?;
    render_built(&brief, format)
}

fn render_built(brief: &Brief, format: BriefFormat) -> Result<Vec<u8>> {
    match format {
        BriefFormat::Pdf => pdf::render(brief, &pdf::PdfOptions::default()).map_err(report_error),
        BriefFormat::Html => html::render_with(brief, &html::HtmlOptions { fonts: html::Fonts::Embedded })
            .map(String::into_bytes)
            .map_err(report_error),
        BriefFormat::Csv => tables::to_csv(brief).map(String::into_bytes).map_err(report_error),
        BriefFormat::Xlsx => tables::to_xlsx(brief).map_err(report_error),
    }
}

/// One download link of the page.
#[derive(Debug, Clone)]
pub struct DownloadLink {
    /// The address.
    pub href: String,
    /// The label.
    pub label: &'static str,
    /// What the file holds.
    pub note: &'static str,
}

fn downloads(id: &str) -> Vec<DownloadLink> {
    vec![
        DownloadLink {
            href: format!("/analyses/{id}/brief.pdf"),
            label: "Brief (PDF)",
            note: "for attaching to a memo; A4, fonts embedded, text selectable",
        },
        DownloadLink {
            href: format!("/analyses/{id}/brief.html"),
            label: "Brief (HTML)",
            note: "one self-contained file; prints on A4 or US Letter",
        },
        DownloadLink {
            href: format!("/analyses/{id}/tables.csv"),
            label: "Tables (CSV)",
            note: "every table of the brief in one file",
        },
        DownloadLink {
            href: format!("/analyses/{id}/tables.xlsx"),
            label: "Tables (XLSX)",
            note: "one sheet per table, numbers kept as numbers",
        },
    ]
}

/// The Brief page.
#[derive(Debug, Template)]
#[template(path = "brief.html")]
pub struct BriefPage {
    /// The frame.
    pub layout: Layout,
    /// The analysis id (for the form's address).
    pub id: String,
    /// The question as entered (empty when none).
    pub question: String,
    /// The author as entered (empty when none).
    pub author: String,
    /// Whether both are entered, so the downloads work.
    pub ready: bool,
    /// The download links.
    pub downloads: Vec<DownloadLink>,
    /// The brief's sections as HTML, escaped by the report crate (it escapes every piece of
    /// analysis text it writes; its charts escape their own text).
    pub brief_html: String,
    /// The most characters accepted in the question.
    pub question_max: usize,
    /// The most characters accepted in the author's name.
    pub author_max: usize,
}

/// `GET /analyses/{id}/brief`: the brief as it stands, inside the app frame, with the form for
/// the question and author and the download links.
pub async fn page(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    let (analysis, checked) = ctx.checked(&id).await?;
    let extras = analysis.extras()?;
    let a = analysis.clone();
    let brief_html = blocking(move || {
        let settings = BriefSettings { missing: MissingDetails::Placeholder, ..BriefSettings::today() };
        let input = brief_input(&a, &checked.document, &settings)?;
        let brief = Brief::build(&input).map_err(report_error)?;
        html::render_fragment(&brief).map_err(report_error)
    })
    .await?;
    let question = extras.question.unwrap_or_default();
    let author = extras.author.unwrap_or_default();
    let page = BriefPage {
        layout: Layout::analysis("Brief", ctx.shared(), analysis.id(), analysis.name(), Section::Brief),
        id: analysis.id().to_owned(),
        ready: !question.trim().is_empty() && !author.trim().is_empty(),
        question,
        author,
        downloads: downloads(analysis.id()),
        brief_html,
        question_max: QUESTION_MAX_CHARS,
        author_max: AUTHOR_MAX_CHARS,
    };
    Ok(render(&page))
}

/// Checks one form field: trimmed, at most `max` characters, no control characters other than
/// line breaks and tabs.
fn field(value: Option<String>, name: &str, max: usize) -> Result<Option<String>> {
    let Some(value) = value else {
        return Ok(None);
    };
    let value = value.trim().to_owned();
    if value.chars().count() > max {
        return Err(ServerError::BadRequest(format!("The {name} can be at most {max} characters long.")));
    }
    if value.chars().any(|c| c.is_control() && !matches!(c, '\n' | '\r' | '\t')) {
        return Err(ServerError::BadRequest(format!("The {name} contains a control character.")));
    }
    Ok((!value.is_empty()).then_some(value))
}

/// `POST /analyses/{id}/brief` with form fields `question` and `author`: stores them with the
/// analysis (an empty field clears it) and redirects back to the Brief page.
pub async fn save(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
    request: Request<Body>,
) -> Result<Response> {
    let analysis = ctx.analysis(&id)?;
    let pairs = forms::read(request, BRIEF_FORM).await?;
    let get = |name: &str| forms::first(&pairs, name).map(str::to_owned);
    if get("question").is_none() && get("author").is_none() {
        return Err(ServerError::BadRequest(
            "The brief form has neither a question nor an author field.".into(),
        ));
    }
    let question = field(get("question"), "decision question", QUESTION_MAX_CHARS)?;
    let author = field(get("author"), "author's name", AUTHOR_MAX_CHARS)?;
    let has_question = get("question").is_some();
    let has_author = get("author").is_some();
    analysis.update_extras(|e| {
        if has_question {
            e.question = question;
        }
        if has_author {
            e.author = author;
        }
    })?;
    Ok(see_other_to(&format!("/analyses/{}/brief", analysis.id())))
}

async fn download(ctx: Ctx, id: String, format: BriefFormat) -> Result<Response> {
    let (analysis, checked) = ctx.checked(&id).await?;
    let a = analysis.clone();
    let bytes = blocking(move || {
        let input = brief_input(&a, &checked.document, &BriefSettings::today())?;
        render_brief(&input, format)
    })
    .await?;
    let mut response = bytes.into_response();
    let headers = response.headers_mut();
    headers.insert(header::CONTENT_TYPE, HeaderValue::from_static(format.content_type()));
    let disposition = format!("attachment; filename=\"{}\"", format.file_name(analysis.id()));
    headers.insert(
        header::CONTENT_DISPOSITION,
        HeaderValue::from_str(&disposition)
            .map_err(|_| ServerError::Internal("the download's file name is not a valid header".into()))?,
    );
    headers.insert(header::CACHE_CONTROL, HeaderValue::from_static("no-store"));
    Ok(response)
}

/// `GET /analyses/{id}/brief.pdf`.
pub async fn download_pdf(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    download(ctx, id, BriefFormat::Pdf).await
}

/// `GET /analyses/{id}/brief.html`.
pub async fn download_html(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    download(ctx, id, BriefFormat::Html).await
}

/// `GET /analyses/{id}/tables.csv`.
pub async fn download_csv(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    download(ctx, id, BriefFormat::Csv).await
}

/// `GET /analyses/{id}/tables.xlsx`.
pub async fn download_xlsx(State(ctx): State<Ctx>, Path(id): Path<String>) -> Result<Response> {
    download(ctx, id, BriefFormat::Xlsx).await
}

/// One section of the brief document.
#[derive(Debug, Serialize)]
pub struct SectionDoc {
    /// The stable id (`summary`, `limitations`…), also the anchor on the page.
    pub id: &'static str,
    /// The heading.
    pub heading: String,
}

/// One table of the brief document. Cells are numbers (full precision), text, or null.
#[derive(Debug, Serialize)]
pub struct TableDoc {
    /// The stable name (the sheet name of the workbook).
    pub name: String,
    /// The caption.
    pub caption: String,
    /// Column headers.
    pub columns: Vec<String>,
    /// Rows of cells.
    pub rows: Vec<Vec<serde_json::Value>>,
}

/// The brief as JSON: what the Brief page shows, in order.
#[derive(Debug, Serialize)]
pub struct BriefDocument {
    /// Schema version.
    pub schema_version: &'static str,
    /// Always `brief`.
    pub kind: &'static str,
    /// The analysis id.
    pub analysis: String,
    /// The decision question, or null when not entered.
    pub question: Option<String>,
    /// The author, or null when not entered.
    pub author: Option<String>,
    /// The brief's title.
    pub title: String,
    /// The sections in order.
    pub sections: Vec<SectionDoc>,
    /// The headings of the cautions in the limitations section.
    pub cautions: Vec<String>,
    /// Every table, in order of appearance.
    pub tables: Vec<TableDoc>,
    /// The download addresses by format.
    pub downloads: serde_json::Value,
}

fn cell_json(c: &Cell) -> serde_json::Value {
    match c {
        Cell::Number { value, .. } => serde_json::json!(value),
        Cell::Text(t) => serde_json::Value::String(t.clone()),
        Cell::Empty => serde_json::Value::Null,
    }
}

/// `GET /api/analyses/{id}/brief`: the brief's sections, cautions and tables (numbers at full
/// precision), the question and author as entered, and the download addresses.
pub async fn api(
    State(ctx): State<Ctx>,
    Path(id): Path<String>,
) -> std::result::Result<Json<BriefDocument>, ApiError> {
    let (analysis, checked) = ctx.checked(&id).await?;
    let extras = analysis.extras()?;
    let a = analysis.clone();
    let brief = blocking(move || {
        let settings = BriefSettings { missing: MissingDetails::Placeholder, ..BriefSettings::today() };
        let input = brief_input(&a, &checked.document, &settings)?;
        Brief::build(&input).map_err(report_error)
    })
    .await?;
    let id = analysis.id();
    Ok(Json(BriefDocument {
        schema_version: SCHEMA_VERSION,
        kind: "brief",
        analysis: id.to_owned(),
        question: extras.question,
        author: extras.author,
        title: brief.title().to_owned(),
        sections: brief
            .sections()
            .iter()
            .map(|s| SectionDoc { id: s.kind().id(), heading: s.heading().to_owned() })
            .collect(),
        cautions: brief.limitations().items().iter().map(|c| c.heading.clone()).collect(),
        tables: brief
            .tables()
            .into_iter()
            .map(|t| TableDoc {
                name: t.name.clone(),
                caption: t.caption.clone(),
                columns: t.columns.clone(),
                rows: t.rows.iter().map(|r| r.iter().map(cell_json).collect()).collect(),
            })
            .collect(),
        downloads: serde_json::json!({
            "pdf": format!("/analyses/{id}/brief.pdf"),
            "html": format!("/analyses/{id}/brief.html"),
            "csv": format!("/analyses/{id}/tables.csv"),
            "xlsx": format!("/analyses/{id}/tables.xlsx"),
        }),
    }))
}

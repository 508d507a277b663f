//! The Tables pages: upload, validate, join, derive and describe datasets before modelling.
//!
//! | Route | What it does |
//! |-------|--------------|
//! | `GET /tables`, `POST /tables` | the session's tables and the upload form; an upload |
//! | `GET /tables/{t}` | one table: its validation report in words, its columns and forms |
//! | `POST /tables/{t}/columns` | edits one column's metadata |
//! | `POST /tables/{t}/confirm` | confirms the table (saved in the store when there is one) |
//! | `POST /tables/{t}/join` | joins another session table onto this one, as a new table |
//! | `POST /tables/{t}/derive` | adds a derived column |
//! | `POST /tables/{t}/analyses` | starts an analysis from the table |
//!
//! Each has a JSON twin under `/api/tables…` (see docs/API.md). Uploaded tables live in the
//! session's [`TableShelf`] until the server stops; confirming saves a version in the store.

use std::collections::BTreeMap;
use std::sync::{Arc, RwLock};

use askama::Template;
use axum::body::Bytes;
use axum::extract::{DefaultBodyLimit, Multipart, Path, Request, State};
use axum::http::StatusCode;
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use axum::{Json, Router};
use serde::{Deserialize, Serialize};
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::dataset::{
    ColumnMeta, ColumnRole, ColumnType, Derivation, DerivedColumn, ImportReport, JoinKind, JoinReport,
    ManifestColumn,
};
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::{ColumnData, Table};
use wardcast_report::brief::DatasetChecksum;
use wardcast_store::{DeriveSummary, Draft, ImportOptions};

use super::forms::{self, FormReading};
use super::pages::{Layout, render};
use super::state::{Analysis, AnalysisParts, Glossary, Source, valid_id};
use super::{Ctx, blocking, see_other_to};
use crate::error::{ApiError, Result, ServerError};

/// The routes of the Tables pages and their JSON twins.
pub(crate) fn routes() -> Router<Ctx> {
    Router::new()
        .route("/tables", get(list_page).post(upload_form).layer(DefaultBodyLimit::disable()))
        .route("/tables/{t}", get(table_page))
        .route("/tables/{t}/columns", post(columns_form))
        .route("/tables/{t}/confirm", post(confirm_form))
        .route("/tables/{t}/join", post(join_form))
        .route("/tables/{t}/derive", post(derive_form))
        .route("/tables/{t}/analyses", post(analysis_form))
        .route("/api/tables", get(api_list).post(api_upload).layer(DefaultBodyLimit::disable()))
        .route("/api/tables/{t}", get(api_table))
        .route("/api/tables/{t}/columns", post(api_columns))
        .route("/api/tables/{t}/confirm", post(api_confirm))
        .route("/api/tables/{t}/join", post(api_join))
        .route("/api/tables/{t}/derive", post(api_derive))
        .route("/api/tables/{t}/analyses", post(api_analysis))
}

// ---------------------------------------------------------------------------------------------
// The shelf of session tables.
// ---------------------------------------------------------------------------------------------

/// A confirmed table: the store version it was saved as, when the workspace has a store.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Confirmed {
    /// `dataset@version` in the store, or `None` when wardcast runs without a data folder.
    pub version_id: Option<String>,
    /// The version number in the store.
    pub version: Option<u32>,
    /// `sha256:` and the hex digest of the stored columnar file.
    pub checksum: Option<String>,
}

/// One table of the session: an upload (or a join), its validation report, the draft the
/// analyst edits, and, once confirmed, where it was saved.
#[derive(Debug, Clone)]
pub struct SessionTable {
    /// The id used in URLs (`/tables/{id}`).
    pub id: String,
    /// The analyst's name for it (user text; escaped wherever shown).
    pub name: String,
    /// The validation report of an upload; `None` for a joined table.
    pub report: Option<ImportReport>,
    /// The table being prepared; `None` while blocking problems (duplicate or blank keys, no
    /// key column) keep the upload from being used.
    pub draft: Option<Draft>,
    /// The join that built it, if any.
    pub join: Option<JoinReport>,
    /// Checksums of the files (or stored versions) it was read from.
    pub checksums: Vec<DatasetChecksum>,
    /// What the last derived columns computed, one plain sentence each.
    pub derive_notes: Vec<String>,
    /// Set when the analyst confirms it; cleared by any later edit.
    pub confirmed: Option<Confirmed>,
}

impl SessionTable {
    /// The draft, or a plain refusal when blocking problems keep the table from being used.
    fn usable(&self) -> Result<&Draft> {
        self.draft.as_ref().ok_or_else(|| {
            ServerError::BadRequest(format!(
                "The table {:?} cannot be used until the problems in its report are fixed in the file \
                 and it is uploaded again.",
                self.name
            ))
        })
    }

    /// Data-quality notes for an analysis: the importer's notes, its dropped rows, the join's
    /// unmatched keys and the derived columns' gaps.
    fn quality_notes(&self) -> Vec<String> {
        let mut notes = Vec::new();
        if let Some(report) = &self.report {
            notes.extend(report.notes.iter().cloned());
            for d in &report.dropped_rows {
                notes.push(format!("Row {} ({}) was dropped at import: {}.", d.row, d.key, d.reason));
            }
            for p in report.problems.iter().filter(|p| !p.blocks_saving) {
                notes.push(p.message.clone());
            }
        }
        if let Some(join) = &self.join {
            notes.extend(join_sentences(join).into_iter().skip(1));
        }
        notes.extend(self.derive_notes.iter().cloned());
        notes
    }
}

/// The tables uploaded or joined in this session, by id. Cheap to clone; the lock is taken
/// only to copy an `Arc` in or out, never across an `.await`.
#[derive(Debug, Clone, Default)]
pub struct TableShelf {
    tables: Arc<RwLock<BTreeMap<String, Arc<SessionTable>>>>,
}

impl TableShelf {
    /// The table with this id, if any.
    pub fn get(&self, id: &str) -> Result<Option<Arc<SessionTable>>> {
        Ok(self.tables.read().map_err(|_| poisoned())?.get(id).cloned())
    }

    /// Every table, ordered by id.
    pub fn list(&self) -> Result<Vec<Arc<SessionTable>>> {
        Ok(self.tables.read().map_err(|_| poisoned())?.values().cloned().collect())
    }

    /// Adds a table under a fresh id made from its name (`-2`, `-3`… when taken) and returns it.
    pub fn add(&self, mut table: SessionTable) -> Result<Arc<SessionTable>> {
        let mut map = self.tables.write().map_err(|_| poisoned())?;
        let mut base = wardcast_store::slug(&table.name);
        base.truncate(48);
        let base = base.trim_matches('-');
        let base = if base.is_empty() || !valid_id(base) { "table" } else { base };
        let id = if map.contains_key(base) {
            (2u32..)
                .map(|n| format!("{base}-{n}"))
                .find(|id| !map.contains_key(id))
                .ok_or_else(|| ServerError::Internal("no free table id".into()))?
        } else {
            base.to_owned()
        };
        table.id = id.clone();
        let table = Arc::new(table);
        map.insert(id, table.clone());
        Ok(table)
    }

    /// Replaces a table (matched by id) with an edited copy.
    pub fn replace(&self, table: SessionTable) -> Result<Arc<SessionTable>> {
        let table = Arc::new(table);
        self.tables.write().map_err(|_| poisoned())?.insert(table.id.clone(), table.clone());
        Ok(table)
    }
}

fn poisoned() -> ServerError {
    ServerError::Internal("the table shelf lock was poisoned by an earlier failure".into())
}

/// Looks a table up: a malformed id is a bad request, an unknown one is not found.
fn find(ctx: &Ctx, id: &str) -> Result<Arc<SessionTable>> {
    if !valid_id(id) {
        return Err(ServerError::BadRequest(
            "A table id is made of lowercase letters, digits and hyphens.".into(),
        ));
    }
    ctx.app()
        .tables()
        .get(id)?
        .ok_or_else(|| ServerError::NotFound(format!("There is no table called {id:?} in this session.")))
}

// ---------------------------------------------------------------------------------------------
// Actions shared by the pages and the JSON API.
// ---------------------------------------------------------------------------------------------

/// What an upload form carries.
struct Upload {
    bytes: Bytes,
    file_name: String,
    name: String,
    key: Option<String>,
}

/// Reads the multipart upload: the `file` part, and the optional `name` and `key` fields.
async fn read_upload(mut multipart: Multipart) -> Result<Upload> {
    let mut file: Option<(String, Bytes)> = None;
    let mut name = String::new();
    let mut key = String::new();
    loop {
        let field = match multipart.next_field().await {
            Ok(Some(field)) => field,
            Ok(None) => break,
            Err(e) => return Err(multipart_error(&e)),
        };
        let field_name = field.name().unwrap_or_default().to_owned();
        let file_name = field.file_name().map(str::to_owned);
        let bytes = field.bytes().await.map_err(|e| multipart_error(&e))?;
        match field_name.as_str() {
            "file" => file = Some((file_name.unwrap_or_else(|| "upload".into()), bytes)),
            "name" => name = String::from_utf8_lossy(&bytes).trim().to_owned(),
            "key" => key = String::from_utf8_lossy(&bytes).trim().to_owned(),
            _ => {}
        }
    }
    let Some((file_name, bytes)) = file.filter(|(f, b)| !(f.is_empty() && b.is_empty())) else {
        return Err(ServerError::BadRequest("Choose a CSV or XLSX file to upload.".into()));
    };
    let name = if name.is_empty() { file_stem(&file_name) } else { name };
    Ok(Upload { bytes, file_name, name, key: Some(key).filter(|k| !k.is_empty()) })
}

fn multipart_error(e: &axum::extract::multipart::MultipartError) -> ServerError {
    if e.status() == StatusCode::PAYLOAD_TOO_LARGE {
        ServerError::TooLarge
    } else {
        ServerError::BadRequest("The upload could not be read as a form with a file.".into())
    }
}

/// The file name without folders and extension, as a default table name.
fn file_stem(file_name: &str) -> String {
    let base = file_name.rsplit(['/', '\\']).next().unwrap_or(file_name);
    let stem = base.rsplit_once('.').map_or(base, |(stem, _)| stem);
    if stem.trim().is_empty() { "table".into() } else { stem.trim().to_owned() }
}

/// Imports an upload and puts it on the shelf.
async fn import(ctx: &Ctx, upload: Upload) -> Result<Arc<SessionTable>> {
    let Upload { bytes, file_name, name, key } = upload;
    let table = blocking(move || {
        let options = ImportOptions { key, ..ImportOptions::default() };
        let staged = wardcast_store::import_bytes(&bytes, &file_name, &options)?;
        let draft = if staged.can_save() { Some(Draft::from_import(&staged)?) } else { None };
        Ok(SessionTable {
            id: String::new(),
            name,
            report: Some(staged.report().clone()),
            draft,
            join: None,
            checksums: vec![DatasetChecksum {
                version_id: file_name,
                checksum: wardcast_store::content_checksum(&bytes),
            }],
            derive_notes: Vec::new(),
            confirmed: None,
        })
    })
    .await?;
    ctx.app().tables().add(table)
}

/// Applies an edit to a copy of the table's draft and shelves the copy (unconfirmed again).
async fn edit<F>(ctx: &Ctx, id: &str, change: F) -> Result<Arc<SessionTable>>
where
    F: FnOnce(&mut SessionTable) -> Result<()> + Send + 'static,
{
    let current = find(ctx, id)?;
    current.usable()?;
    let mut table = (*current).clone();
    let edited = blocking(move || {
        change(&mut table)?;
        table.confirmed = None;
        Ok(table)
    })
    .await?;
    ctx.app().tables().replace(edited)
}

/// Sets one column's metadata.
async fn set_meta(ctx: &Ctx, id: &str, meta: ColumnMeta) -> Result<Arc<SessionTable>> {
    edit(ctx, id, move |t| {
        let draft = t.draft.as_mut().ok_or_else(|| ServerError::Internal("draft vanished".into()))?;
        draft.set_meta(meta)?;
        Ok(())
    })
    .await
}

/// Adds a derived column, recording what it computed.
async fn derive(ctx: &Ctx, id: &str, spec: DerivedColumn) -> Result<Arc<SessionTable>> {
    if spec.name.trim().is_empty() {
        return Err(ServerError::BadRequest("Give the derived column a name.".into()));
    }
    if let Derivation::RatePer { per, .. } = &spec.derivation
        && !(per.is_finite() && *per > 0.0)
    {
        return Err(ServerError::BadRequest("A rate is per a positive number of people, e.g. 10000.".into()));
    }
    let [a, b] = spec.derivation.inputs();
    if a == b {
        return Err(ServerError::BadRequest("A derived column needs two different columns.".into()));
    }
    edit(ctx, id, move |t| {
        let draft = t.draft.as_mut().ok_or_else(|| ServerError::Internal("draft vanished".into()))?;
        let description = spec.derivation.describe();
        let summary = draft.add_derived(spec)?;
        t.derive_notes.retain(|n| !n.starts_with(&format!("{:?} ", summary.name)));
        t.derive_notes.push(derive_sentence(&summary, &description));
        Ok(())
    })
    .await
}

fn derive_sentence(s: &DeriveSummary, description: &str) -> String {
    let mut text = format!("{:?} is {description}: computed for {} rows", s.name, s.computed);
    if s.missing_inputs > 0 {
        text.push_str(&format!(", missing in {} where an input is missing", s.missing_inputs));
    }
    if s.zero_denominators > 0 {
        text.push_str(&format!(", missing in {} where the denominator is zero", s.zero_denominators));
    }
    text.push('.');
    text
}

/// Confirms a table: saves its draft as the next store version when the workspace has a store.
async fn confirm(ctx: &Ctx, id: &str) -> Result<Arc<SessionTable>> {
    let current = find(ctx, id)?;
    let draft = current.usable()?.clone();
    let mut table = (*current).clone();
    let store = ctx.app().store().cloned();
    let name = table.name.clone();
    let confirmed = blocking(move || match store {
        Some(store) => {
            let mut store = store.lock().map_err(|_| poisoned())?;
            let manifest = store.save(&name, draft)?;
            Ok(Confirmed {
                version_id: Some(manifest.version_id.clone()),
                version: Some(manifest.version),
                checksum: Some(manifest.checksum.clone()),
            })
        }
        None => Ok(Confirmed { version_id: None, version: None, checksum: None }),
    })
    .await?;
    table.confirmed = Some(confirmed);
    ctx.app().tables().replace(table)
}

/// Joins table `with` onto table `id` as a new session table.
async fn join(ctx: &Ctx, id: &str, with: &str, kind: JoinKind) -> Result<Arc<SessionTable>> {
    let left = find(ctx, id)?;
    if with.trim().is_empty() {
        return Err(ServerError::BadRequest("Choose the table to join onto this one.".into()));
    }
    if with == id {
        return Err(ServerError::BadRequest(
            "A table cannot be joined with itself; choose another one.".into(),
        ));
    }
    let right = ctx.app().tables().get(with)?.ok_or_else(|| {
        ServerError::BadRequest(format!("There is no table called {with:?} in this session to join."))
    })?;
    left.usable()?;
    right.usable()?;
    let table = blocking(move || {
        let (l, r) = (left.usable()?, right.usable()?);
        let joined = wardcast_store::join(l, r, kind)?;
        let mut report = joined.report;
        report.left = left.name.clone();
        report.right = right.name.clone();
        let Some(draft) = joined.draft else {
            let mut repeated = report.duplicates_left.clone();
            repeated.extend(report.duplicates_right.iter().cloned());
            return Err(ServerError::Store(wardcast_store::StoreError::Join {
                reason: format!(
                    "the keys {} appear more than once, so rows cannot be matched one to one",
                    repeated.join(", ")
                ),
            }));
        };
        let mut checksums = left.checksums.clone();
        checksums.extend(right.checksums.iter().cloned());
        Ok(SessionTable {
            id: String::new(),
            name: format!("{} with {}", left.name, right.name),
            report: None,
            draft: Some(draft),
            join: Some(report),
            checksums,
            derive_notes: left.derive_notes.clone(),
            confirmed: None,
        })
    })
    .await?;
    ctx.app().tables().add(table)
}

/// Fits a model on the table and adds the analysis to the workspace.
async fn start_analysis(ctx: &Ctx, id: &str, name: &str, spec: ModelSpec) -> Result<Arc<Analysis>> {
    let table = find(ctx, id)?;
    table.usable()?;
    if spec.response.trim().is_empty() {
        return Err(ServerError::BadRequest("Choose the outcome column to model.".into()));
    }
    if spec.predictors.is_empty() {
        return Err(ServerError::BadRequest("Choose at least one indicator to model the outcome on.".into()));
    }
    if spec.predictors.iter().any(|p| p.column == spec.response) {
        return Err(ServerError::BadRequest(format!(
            "{:?} is the outcome, so it cannot also be an indicator.",
            spec.response
        )));
    }
    let name = if name.trim().is_empty() { table.name.clone() } else { name.trim().to_owned() };
    let analysis_id = ctx.app().fresh_id(&name)?;
    let analysis = blocking(move || {
        let draft = table.usable()?;
        let engine = wardcast_store::engine_table(draft.frame(), draft.key())?;
        let columns: Vec<ColumnMeta> = draft.columns().iter().map(|c| c.meta.clone()).collect();
        let areas = if draft.key().to_ascii_lowercase().contains("district") { "districts" } else { "areas" };
        let glossary = Glossary::from_meta(areas, &columns).with_steps_from(&engine);
        let checksums = match &table.confirmed {
            Some(Confirmed { version_id: Some(v), checksum: Some(c), .. }) => {
                vec![DatasetChecksum { version_id: v.clone(), checksum: c.clone() }]
            }
            _ => table.checksums.clone(),
        };
        let source = Source {
            name: table.name.clone(),
            table: engine,
            columns,
            checksums,
            join: table.join.clone(),
            notes: table.quality_notes(),
            dataset: table.confirmed.as_ref().and_then(|c| c.version_id.clone()),
        };
        Analysis::build(AnalysisParts {
            id: analysis_id,
            name,
            glossary,
            source: Arc::new(source),
            spec,
            parent: None,
        })
    })
    .await?;
    ctx.app().insert_new(analysis)
}

// ---------------------------------------------------------------------------------------------
// Words.
// ---------------------------------------------------------------------------------------------

fn plural(n: usize, one: &str, many: &str) -> String {
    if n == 1 { format!("1 {one}") } else { format!("{n} {many}") }
}

fn listing(keys: &[String]) -> String {
    const SHOWN: usize = 20;
    let mut text = keys.iter().take(SHOWN).cloned().collect::<Vec<_>>().join(", ");
    if keys.len() > SHOWN {
        text.push_str(&format!(" and {} more", keys.len() - SHOWN));
    }
    text
}

/// A join report in sentences: the first says what was joined, the others what did not match.
pub fn join_sentences(r: &JoinReport) -> Vec<String> {
    let kind = match r.kind {
        JoinKind::Left => "kept every row of the first table",
        JoinKind::Inner => "kept only the rows whose key is in both tables",
    };
    let mut out = vec![format!(
        "{:?} was joined with {:?} by {:?} and {:?}; the join {kind}: {} in the result, {} matched.",
        r.left,
        r.right,
        r.left_key,
        r.right_key,
        plural(r.rows, "row", "rows"),
        plural(r.matched, "key", "keys"),
    )];
    if r.unmatched_left.is_empty() {
        out.push(format!("Every key of {:?} has a partner in {:?}.", r.left, r.right));
    } else {
        out.push(format!(
            "{} of {:?} found no partner in {:?}: {}.",
            plural(r.unmatched_left.len(), "key", "keys"),
            r.left,
            r.right,
            listing(&r.unmatched_left)
        ));
    }
    if r.unmatched_right.is_empty() {
        out.push(format!("Every key of {:?} has a partner in {:?}.", r.right, r.left));
    } else {
        out.push(format!(
            "{} of {:?} found no partner in {:?} and {}: {}.",
            plural(r.unmatched_right.len(), "key", "keys"),
            r.right,
            r.left,
            if r.unmatched_right.len() == 1 { "is left out" } else { "are left out" },
            listing(&r.unmatched_right)
        ));
    }
    for (side, keys) in [(&r.left, &r.duplicates_left), (&r.right, &r.duplicates_right)] {
        if !keys.is_empty() {
            out.push(format!("These keys appear more than once in {side:?}: {}.", listing(keys)));
        }
    }
    for (old, new) in &r.renamed {
        out.push(format!(
            "The column {old:?} of {:?} was renamed {new:?}, as the first table has one of that name.",
            r.right
        ));
    }
    out
}

// ---------------------------------------------------------------------------------------------
// Pages.
// ---------------------------------------------------------------------------------------------

/// One table on the list page.
#[derive(Debug, Clone)]
pub struct TableCard {
    /// Its page.
    pub href: String,
    /// Its name.
    pub name: String,
    /// Rows and columns, in words.
    pub size: String,
    /// Where it stands: usable, confirmed, blocked.
    pub status: String,
}

/// `GET /tables`.
#[derive(Debug, Template)]
#[template(path = "tables.html")]
pub struct TablesPage {
    /// The frame.
    pub layout: Layout,
    /// The tables.
    pub cards: Vec<TableCard>,
}

fn status_text(t: &SessionTable) -> String {
    match (&t.draft, &t.confirmed) {
        (None, _) => "cannot be used until the problems in its report are fixed".into(),
        (Some(_), Some(Confirmed { version_id: Some(v), .. })) => format!("confirmed, saved as {v}"),
        (Some(_), Some(_)) => "confirmed for this session".into(),
        (Some(_), None) => "not confirmed yet".into(),
    }
}

fn card(t: &SessionTable) -> TableCard {
    let (rows, columns) = match (&t.draft, &t.report) {
        (Some(d), _) => (d.frame().height(), d.columns().len()),
        (None, Some(r)) => (r.rows, r.columns.len()),
        (None, None) => (0, 0),
    };
    TableCard {
        href: format!("/tables/{}", t.id),
        name: t.name.clone(),
        size: format!("{} and {}", plural(rows, "row", "rows"), plural(columns, "column", "columns")),
        status: status_text(t),
    }
}

async fn list_page(State(ctx): State<Ctx>) -> Result<Response> {
    let cards = ctx.app().tables().list()?.iter().map(|t| card(t)).collect();
    Ok(render(&TablesPage { layout: Layout::plain("Tables", ctx.shared()), cards }))
}

/// A choice in a `<select>`.
#[derive(Debug, Clone)]
pub struct Choice {
    /// The submitted value.
    pub value: String,
    /// The visible text.
    pub text: String,
    /// Whether it is chosen.
    pub selected: bool,
}

/// A problem the importer found, in words.
#[derive(Debug, Clone)]
pub struct ProblemView {
    /// What is wrong.
    pub message: String,
    /// Example cells, e.g. `row 12: "n/a"`.
    pub examples: Vec<String>,
    /// What to do about it.
    pub remedy: String,
    /// Whether it keeps the table from being used.
    pub blocks: bool,
}

/// One column of the table page.
#[derive(Debug, Clone)]
pub struct ColumnView {
    /// The column name (user text).
    pub name: String,
    /// Its storage type, in words.
    pub type_name: String,
    /// Why the importer chose that type (empty when none).
    pub type_note: String,
    /// The role, in words.
    pub role: String,
    /// The role choices for the form.
    pub roles: Vec<Choice>,
    /// Label, unit, source agency, vintage as currently set.
    pub label: String,
    /// The unit.
    pub unit: String,
    /// The agency the values come from.
    pub source: String,
    /// The year the values describe.
    pub vintage: String,
    /// Cells with a value.
    pub present: usize,
    /// Missing cells.
    pub missing: usize,
    /// How it is derived, when it is.
    pub derived: String,
    /// Whether it holds numbers.
    pub numeric: bool,
    /// Whether it is the key.
    pub is_key: bool,
    /// Whether its role makes it an indicator (preselected as a predictor).
    pub indicator: bool,
}

/// `GET /tables/{t}`.
#[derive(Debug, Template)]
#[template(path = "tables_table.html")]
pub struct TablePage {
    /// The frame.
    pub layout: Layout,
    /// The table id.
    pub id: String,
    /// Its name.
    pub name: String,
    /// A message about the last action that failed (shown first), or empty.
    pub error: String,
    /// Whether the table can be used (no blocking problems).
    pub usable: bool,
    /// Rows and columns.
    pub rows: usize,
    /// Number of columns.
    pub ncols: usize,
    /// The opening sentences of the report.
    pub summary: Vec<String>,
    /// Problems found.
    pub problems: Vec<ProblemView>,
    /// Rows dropped at import, each as a sentence.
    pub dropped: Vec<String>,
    /// Importer notes and derived-column notes.
    pub notes: Vec<String>,
    /// The join in words.
    pub join: Vec<String>,
    /// The columns.
    pub columns: Vec<ColumnView>,
    /// The confirmation, in words (empty when not confirmed).
    pub confirmed: String,
    /// The stored checksum, when saved.
    pub checksum: String,
    /// Whether the workspace keeps a data folder.
    pub has_store: bool,
    /// Other usable tables to join with.
    pub others: Vec<Choice>,
    /// Numeric columns, for the derive and outcome forms.
    pub numeric: Vec<Choice>,
}

const ROLES: [ColumnRole; 6] = [
    ColumnRole::Key,
    ColumnRole::Count,
    ColumnRole::Population,
    ColumnRole::Rate,
    ColumnRole::Indicator,
    ColumnRole::Group,
];

fn type_words(t: ColumnType) -> &'static str {
    match t {
        ColumnType::Integer => "whole numbers",
        ColumnType::Decimal => "numbers",
        ColumnType::Text => "text",
    }
}

/// Counts the present and missing cells of every column of the engine table.
fn cell_counts(table: &Table) -> BTreeMap<String, (usize, usize)> {
    table
        .columns()
        .iter()
        .map(|c| {
            let missing = match &c.data {
                ColumnData::Numeric(v) => v.iter().filter(|x| !x.is_some_and(f64::is_finite)).count(),
                ColumnData::Text(v) => v.iter().filter(|x| x.is_none()).count(),
            };
            (c.name.clone(), (c.data.len() - missing, missing))
        })
        .collect()
}

impl TablePage {
    /// Builds the page. Converts the draft to count cells, so call it inside `blocking`.
    fn build(t: &SessionTable, others: Vec<Choice>, shared: bool, has_store: bool, error: String) -> Self {
        let mut summary = Vec::new();
        let mut problems = Vec::new();
        let mut dropped = Vec::new();
        let mut notes = Vec::new();
        let mut summaries = BTreeMap::new();
        if let Some(r) = &t.report {
            let s = &r.source;
            let mut how = format!("{}, {}", s.format, s.encoding);
            if let Some(d) = &s.delimiter {
                how.push_str(&format!(", cells separated by {d}"));
            }
            if let Some(sheet) = &s.sheet {
                how.push_str(&format!(", worksheet {sheet:?}"));
            }
            summary.push(format!(
                "{:?} was read as {how}: {} and {}.",
                s.file_name,
                plural(r.rows, "row", "rows"),
                plural(r.columns.len(), "column", "columns")
            ));
            for note in [&s.delimiter_note, &s.decimal_note].into_iter().flatten() {
                summary.push(note.clone());
            }
            summary.push(r.key_note.clone());
            problems = r
                .problems
                .iter()
                .map(|p| ProblemView {
                    message: p.message.clone(),
                    examples: p.examples.iter().map(|c| format!("row {}: {:?}", c.row, c.value)).collect(),
                    remedy: p.remedy.clone(),
                    blocks: p.blocks_saving,
                })
                .collect();
            dropped = r
                .dropped_rows
                .iter()
                .map(|d| format!("Row {} (key {:?}) was left out: {}.", d.row, d.key, d.reason))
                .collect();
            notes.extend(r.notes.iter().cloned());
            summaries = r.columns.iter().map(|c| (c.column.clone(), c)).collect();
        }
        notes.extend(t.derive_notes.iter().cloned());
        let join = t.join.as_ref().map(join_sentences).unwrap_or_default();

        let mut columns = Vec::new();
        let mut rows = 0;
        if let Some(draft) = &t.draft {
            rows = draft.frame().height();
            let counts = wardcast_store::engine_table(draft.frame(), draft.key())
                .map(|e| cell_counts(&e))
                .unwrap_or_default();
            for ManifestColumn { column_type, meta } in draft.columns() {
                let is_key = meta.column == draft.key();
                let (present, missing) =
                    if is_key { (rows, 0) } else { counts.get(&meta.column).copied().unwrap_or((0, 0)) };
                let derived = draft
                    .derived()
                    .iter()
                    .find(|d| d.name == meta.column)
                    .map(|d| d.derivation.describe())
                    .unwrap_or_default();
                columns.push(ColumnView {
                    name: meta.column.clone(),
                    type_name: type_words(*column_type).into(),
                    type_note: summaries.get(&meta.column).map(|s| s.type_note.clone()).unwrap_or_default(),
                    role: meta.role.name().into(),
                    roles: ROLES
                        .iter()
                        .map(|r| Choice {
                            value: r.name().into(),
                            text: r.name().into(),
                            selected: *r == meta.role,
                        })
                        .collect(),
                    label: meta.label.clone().unwrap_or_default(),
                    unit: meta.unit.clone().unwrap_or_default(),
                    source: meta.source.clone().unwrap_or_default(),
                    vintage: meta.vintage.map(|v| v.to_string()).unwrap_or_default(),
                    present,
                    missing,
                    derived,
                    numeric: column_type.is_numeric(),
                    is_key,
                    indicator: meta.role == ColumnRole::Indicator,
                });
            }
        } else if let Some(r) = &t.report {
            rows = r.rows;
            for c in &r.columns {
                columns.push(ColumnView {
                    name: c.column.clone(),
                    type_name: type_words(c.column_type).into(),
                    type_note: c.type_note.clone(),
                    role: c.role.name().into(),
                    roles: Vec::new(),
                    label: String::new(),
                    unit: String::new(),
                    source: String::new(),
                    vintage: String::new(),
                    present: c.count.saturating_sub(c.missing),
                    missing: c.missing,
                    derived: String::new(),
                    numeric: c.column_type.is_numeric(),
                    is_key: r.key.as_deref() == Some(c.column.as_str()),
                    indicator: false,
                });
            }
        }
        let rate =
            columns.iter().find(|c| c.numeric && c.role == "rate" && !c.is_key).map(|c| c.name.clone());
        let numeric = columns
            .iter()
            .filter(|c| c.numeric && !c.is_key)
            .map(|c| Choice {
                value: c.name.clone(),
                text: c.name.clone(),
                selected: rate.as_deref() == Some(c.name.as_str()),
            })
            .collect();
        let (confirmed, checksum) = match &t.confirmed {
            Some(Confirmed { version_id: Some(v), version, checksum }) => (
                format!(
                    "Confirmed and saved in the data folder as {v}{}.",
                    version.map(|n| format!(" (version {n})")).unwrap_or_default()
                ),
                checksum.clone().unwrap_or_default(),
            ),
            Some(_) => (
                "Confirmed for this session. wardcast was started without a data folder, so the table is \
                 not saved beyond this session."
                    .into(),
                String::new(),
            ),
            None => (String::new(), String::new()),
        };
        TablePage {
            layout: Layout::plain(format!("Table {}", t.name), shared),
            id: t.id.clone(),
            name: t.name.clone(),
            error,
            usable: t.draft.is_some(),
            rows,
            ncols: columns.len(),
            summary,
            problems,
            dropped,
            notes,
            join,
            columns,
            confirmed,
            checksum,
            has_store,
            others,
            numeric,
        }
    }
}

/// Renders a table's page, with `error` shown first and the given status.
async fn show(ctx: &Ctx, table: Arc<SessionTable>, error: String, status: StatusCode) -> Result<Response> {
    let others = ctx
        .app()
        .tables()
        .list()?
        .iter()
        .filter(|o| o.id != table.id && o.draft.is_some())
        .map(|o| Choice { value: o.id.clone(), text: o.name.clone(), selected: false })
        .collect();
    let shared = ctx.shared();
    let has_store = ctx.app().store().is_some();
    let page = blocking(move || Ok(TablePage::build(&table, others, shared, has_store, error))).await?;
    let mut response = render(&page);
    if response.status() == StatusCode::OK {
        *response.status_mut() = status;
    }
    Ok(response)
}

async fn table_page(State(ctx): State<Ctx>, Path(t): Path<String>) -> Result<Response> {
    let table = find(&ctx, &t)?;
    show(&ctx, table, String::new(), StatusCode::OK).await
}

/// After a form post: a redirect on success; the table page with the message (422) when the
/// store or the engine refused the change; the plain error page for anything else.
async fn after_form<T>(
    ctx: &Ctx,
    t: &str,
    outcome: Result<T>,
    next: impl FnOnce(T) -> String,
) -> Result<Response> {
    match outcome {
        Ok(value) => Ok(see_other_to(&next(value))),
        Err(e) if e.status() == StatusCode::UNPROCESSABLE_ENTITY => {
            let table = find(ctx, t)?;
            show(ctx, table, e.public_message(), StatusCode::UNPROCESSABLE_ENTITY).await
        }
        Err(e) => Err(e),
    }
}

async fn upload_form(State(ctx): State<Ctx>, multipart: Multipart) -> Result<Response> {
    let upload = read_upload(multipart).await?;
    let table = import(&ctx, upload).await?;
    Ok(see_other_to(&format!("/tables/{}", table.id)))
}

/// The fields of a urlencoded form, in order (repeated names allowed).
type Fields = Vec<(String, String)>;

/// How the column, join, derive and analysis forms of a table are read.
const TABLE_FORM: FormReading =
    FormReading::plain("The form could not be read. Send it again from the page.");

fn field<'a>(fields: &'a Fields, name: &str) -> &'a str {
    fields.iter().find(|(k, _)| k == name).map_or("", |(_, v)| v.trim())
}

fn optional(fields: &Fields, name: &str) -> Option<String> {
    Some(field(fields, name).to_owned()).filter(|s| !s.is_empty())
}

fn meta_from_form(fields: &Fields) -> Result<ColumnMeta> {
    let column = field(fields, "column");
    if column.is_empty() {
        return Err(ServerError::BadRequest("Say which column the description is for.".into()));
    }
    let role =
        ColumnRole::parse(field(fields, "role")).map_err(|e| ServerError::BadRequest(e.to_string()))?;
    let vintage = match field(fields, "vintage") {
        "" => None,
        v => Some(v.parse::<i32>().map_err(|_| {
            ServerError::BadRequest(format!("The vintage is a year, such as 2025; {v:?} is not one."))
        })?),
    };
    Ok(ColumnMeta {
        column: column.to_owned(),
        label: optional(fields, "label"),
        unit: optional(fields, "unit"),
        source: optional(fields, "source"),
        vintage,
        role,
    })
}

async fn columns_form(State(ctx): State<Ctx>, Path(t): Path<String>, request: Request) -> Result<Response> {
    let fields = forms::read(request, TABLE_FORM).await?;
    find(&ctx, &t)?;
    let meta = meta_from_form(&fields)?;
    let outcome = set_meta(&ctx, &t, meta).await;
    after_form(&ctx, &t, outcome, |table| format!("/tables/{}#columns", table.id)).await
}

async fn confirm_form(State(ctx): State<Ctx>, Path(t): Path<String>) -> Result<Response> {
    let outcome = confirm(&ctx, &t).await;
    after_form(&ctx, &t, outcome, |table| format!("/tables/{}", table.id)).await
}

fn join_kind(text: &str) -> Result<JoinKind> {
    match text {
        "left" | "" => Ok(JoinKind::Left),
        "inner" => Ok(JoinKind::Inner),
        other => Err(ServerError::BadRequest(format!("{other:?} is not a kind of join; use left or inner."))),
    }
}

async fn join_form(State(ctx): State<Ctx>, Path(t): Path<String>, request: Request) -> Result<Response> {
    let fields = forms::read(request, TABLE_FORM).await?;
    find(&ctx, &t)?;
    let kind = join_kind(field(&fields, "kind"))?;
    let outcome = join(&ctx, &t, field(&fields, "with"), kind).await;
    after_form(&ctx, &t, outcome, |table| format!("/tables/{}", table.id)).await
}

fn derived_from_form(fields: &Fields) -> Result<DerivedColumn> {
    let (a, b) = (field(fields, "first").to_owned(), field(fields, "second").to_owned());
    if a.is_empty() || b.is_empty() {
        return Err(ServerError::BadRequest("Choose the two columns the new one is computed from.".into()));
    }
    let derivation = match field(fields, "kind") {
        "rate_per" => {
            let per = match field(fields, "per") {
                "" => 10_000.0,
                p => p.replace(',', "").parse::<f64>().map_err(|_| {
                    ServerError::BadRequest(format!(
                        "The base of a rate is a number, such as 10000; {p:?} is not one."
                    ))
                })?,
            };
            Derivation::RatePer { count: a, population: b, per }
        }
        "share" => Derivation::Share { part: a, whole: b },
        "difference" => Derivation::Difference { left: a, right: b },
        "ratio" => Derivation::Ratio { numerator: a, denominator: b },
        other => {
            return Err(ServerError::BadRequest(format!(
                "{other:?} is not a kind of derived column; use rate_per, share, difference or ratio."
            )));
        }
    };
    let name = field(fields, "name").to_owned();
    let (label, unit) = (optional(fields, "label"), optional(fields, "unit"));
    let meta = (label.is_some() || unit.is_some()).then(|| {
        let role = if matches!(derivation, Derivation::RatePer { .. }) {
            ColumnRole::Rate
        } else {
            ColumnRole::Indicator
        };
        ColumnMeta { label, unit, ..ColumnMeta::new(name.clone(), role) }
    });
    Ok(DerivedColumn { name, derivation, meta })
}

async fn derive_form(State(ctx): State<Ctx>, Path(t): Path<String>, request: Request) -> Result<Response> {
    let fields = forms::read(request, TABLE_FORM).await?;
    find(&ctx, &t)?;
    let spec = derived_from_form(&fields)?;
    let outcome = derive(&ctx, &t, spec).await;
    after_form(&ctx, &t, outcome, |table| format!("/tables/{}#columns", table.id)).await
}

async fn analysis_form(State(ctx): State<Ctx>, Path(t): Path<String>, request: Request) -> Result<Response> {
    let fields = forms::read(request, TABLE_FORM).await?;
    find(&ctx, &t)?;
    let predictors: Vec<&str> =
        fields.iter().filter(|(k, v)| k == "predictor" && !v.is_empty()).map(|(_, v)| v.as_str()).collect();
    let spec = ModelSpec::new(field(&fields, "response"), predictors);
    let outcome = start_analysis(&ctx, &t, field(&fields, "name"), spec).await;
    after_form(&ctx, &t, outcome, |a| format!("/analyses/{}", a.id())).await
}

// ---------------------------------------------------------------------------------------------
// JSON API.
// ---------------------------------------------------------------------------------------------

/// One entry of `GET /api/tables`.
#[derive(Debug, Serialize)]
pub struct TableSummary {
    /// The id.
    pub id: String,
    /// The analyst's name for it.
    pub name: String,
    /// Rows (0 while it cannot be used).
    pub rows: usize,
    /// Whether it can be used (no blocking problems).
    pub usable: bool,
    /// Set once confirmed.
    pub confirmed: Option<Confirmed>,
    /// Its page.
    pub page: String,
    /// Its JSON document.
    pub api: String,
}

/// `GET /api/tables`.
#[derive(Debug, Serialize)]
pub struct TableList {
    /// Schema version.
    pub schema_version: &'static str,
    /// Always `table_list`.
    pub kind: &'static str,
    /// The tables, ordered by id.
    pub tables: Vec<TableSummary>,
}

/// `GET /api/tables/{t}`: everything the table page shows.
#[derive(Debug, Serialize)]
pub struct TableDocument {
    /// Schema version.
    pub schema_version: &'static str,
    /// Always `table`.
    pub kind: &'static str,
    /// The id.
    pub id: String,
    /// The analyst's name for it.
    pub name: String,
    /// Whether it can be used (no blocking problems).
    pub usable: bool,
    /// The key column (when usable).
    pub key: Option<String>,
    /// Rows (when usable).
    pub rows: usize,
    /// The validation report of the upload (absent for joined tables).
    pub import: Option<ImportReport>,
    /// Column types and metadata (when usable).
    pub columns: Vec<ManifestColumn>,
    /// Derived columns.
    pub derived: Vec<DerivedColumn>,
    /// What each derived column computed, in words.
    pub derive_notes: Vec<String>,
    /// The join that built it.
    pub join: Option<JoinReport>,
    /// Checksums of what it was read from.
    pub checksums: Vec<DatasetChecksum>,
    /// Set once confirmed.
    pub confirmed: Option<Confirmed>,
}

impl TableDocument {
    fn of(t: &SessionTable) -> Self {
        TableDocument {
            schema_version: SCHEMA_VERSION,
            kind: "table",
            id: t.id.clone(),
            name: t.name.clone(),
            usable: t.draft.is_some(),
            key: t.draft.as_ref().map(|d| d.key().to_owned()),
            rows: t.draft.as_ref().map_or(0, |d| d.frame().height()),
            import: t.report.clone(),
            columns: t.draft.as_ref().map(|d| d.columns().to_vec()).unwrap_or_default(),
            derived: t.draft.as_ref().map(|d| d.derived().to_vec()).unwrap_or_default(),
            derive_notes: t.derive_notes.clone(),
            join: t.join.clone(),
            checksums: t.checksums.clone(),
            confirmed: t.confirmed.clone(),
        }
    }
}

/// The reply to `POST /api/tables/{t}/analyses`.
#[derive(Debug, Serialize)]
pub struct AnalysisCreated {
    /// The new analysis' id.
    pub id: String,
    /// Its Effects page.
    pub page: String,
    /// Its fit document.
    pub fit: String,
}

/// `POST /api/tables/{t}/join` body.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct JoinRequest {
    /// The other table's id.
    pub with: String,
    /// `left` (default) or `inner`.
    #[serde(default = "left_join")]
    pub kind: JoinKind,
}

fn left_join() -> JoinKind {
    JoinKind::Left
}

/// `POST /api/tables/{t}/analyses` body.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AnalysisRequest {
    /// The analysis' name (the table's name when empty).
    #[serde(default)]
    pub name: String,
    /// The model.
    pub spec: ModelSpec,
}

/// Parses a JSON body, answering 400 with the parser's sentence when it does not fit.
fn parse_json<T: for<'de> Deserialize<'de>>(body: &[u8]) -> Result<T> {
    serde_json::from_slice(body).map_err(|e| {
        ServerError::BadRequest(format!("The request body is not the JSON this route expects: {e}."))
    })
}

fn created<T: Serialize>(body: T) -> Response {
    (StatusCode::CREATED, Json(body)).into_response()
}

async fn api_list(State(ctx): State<Ctx>) -> std::result::Result<Json<TableList>, ApiError> {
    let tables = ctx
        .app()
        .tables()
        .list()?
        .iter()
        .map(|t| TableSummary {
            id: t.id.clone(),
            name: t.name.clone(),
            rows: t.draft.as_ref().map_or(0, |d| d.frame().height()),
            usable: t.draft.is_some(),
            confirmed: t.confirmed.clone(),
            page: format!("/tables/{}", t.id),
            api: format!("/api/tables/{}", t.id),
        })
        .collect();
    Ok(Json(TableList { schema_version: SCHEMA_VERSION, kind: "table_list", tables }))
}

async fn api_upload(State(ctx): State<Ctx>, multipart: Multipart) -> std::result::Result<Response, ApiError> {
    let upload = read_upload(multipart).await?;
    let table = import(&ctx, upload).await?;
    Ok(created(TableDocument::of(&table)))
}

async fn api_table(
    State(ctx): State<Ctx>,
    Path(t): Path<String>,
) -> std::result::Result<Json<TableDocument>, ApiError> {
    let table = find(&ctx, &t)?;
    Ok(Json(TableDocument::of(&table)))
}

async fn api_columns(
    State(ctx): State<Ctx>,
    Path(t): Path<String>,
    body: Bytes,
) -> std::result::Result<Json<TableDocument>, ApiError> {
    find(&ctx, &t)?;
    let meta: ColumnMeta = parse_json(&body)?;
    let table = set_meta(&ctx, &t, meta).await?;
    Ok(Json(TableDocument::of(&table)))
}

async fn api_confirm(
    State(ctx): State<Ctx>,
    Path(t): Path<String>,
) -> std::result::Result<Json<TableDocument>, ApiError> {
    let table = confirm(&ctx, &t).await?;
    Ok(Json(TableDocument::of(&table)))
}

async fn api_join(
    State(ctx): State<Ctx>,
    Path(t): Path<String>,
    body: Bytes,
) -> std::result::Result<Response, ApiError> {
    find(&ctx, &t)?;
    let request: JoinRequest = parse_json(&body)?;
    let table = join(&ctx, &t, &request.with, request.kind).await?;
    Ok(created(TableDocument::of(&table)))
}

async fn api_derive(
    State(ctx): State<Ctx>,
    Path(t): Path<String>,
    body: Bytes,
) -> std::result::Result<Json<TableDocument>, ApiError> {
    find(&ctx, &t)?;
    let spec: DerivedColumn = parse_json(&body)?;
    let table = derive(&ctx, &t, spec).await?;
    Ok(Json(TableDocument::of(&table)))
}

async fn api_analysis(
    State(ctx): State<Ctx>,
    Path(t): Path<String>,
    body: Bytes,
) -> std::result::Result<Response, ApiError> {
    find(&ctx, &t)?;
    let request: AnalysisRequest = parse_json(&body)?;
    let analysis = start_analysis(&ctx, &t, &request.name, request.spec).await?;
    let id = analysis.id().to_owned();
    Ok(created(AnalysisCreated {
        page: format!("/analyses/{id}"),
        fit: format!("/api/analyses/{id}/fit"),
        id,
    }))
}

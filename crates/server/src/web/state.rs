//! The in-memory workspace behind the web app: the analyses of this session (source table,
//! fit, diagnostics, the analyst's extras), the background jobs, the optional store, and what
//! the pages need to describe columns in words (labels and units).
//!
//! The analysis map sits behind one `RwLock`. Handlers take the lock only to clone an `Arc` to
//! an analysis and release it at once, so no lock is ever held across an `.await` or while a
//! page renders.

use std::collections::BTreeMap;
use std::sync::{Arc, Mutex, OnceLock, RwLock};

use wardcast_contract::allocation::AllocationDocument;
use wardcast_contract::checks::ChecksDocument;
use wardcast_contract::dataset::{ColumnMeta, JoinReport};
use wardcast_contract::fit::FitDocument;
use wardcast_contract::scenario::ScenarioDocument;
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::Table;
use wardcast_engine::diagnostics::Checks;
use wardcast_report::brief::{DatasetChecksum, ModelChoice};
use wardcast_store::Store;

use super::jobs::Jobs;
use super::tables::TableShelf;
use crate::analysis::Fitted;
use crate::error::{Result, ServerError};

/// What the pages know about a column beyond its name: a label for sentences, a unit, and the
/// step used when an effect is written as a comparison.
#[derive(Debug, Clone, PartialEq)]
pub struct ColumnInfo {
    /// A short human label used in sentences, e.g. "unemployment".
    pub label: String,
    /// The unit: `%` (read as percentage points), `$`, or free text such as
    /// "assault incidents per 10,000 residents". `None` when unknown.
    pub unit: Option<String>,
    /// The size of the difference compared in sentences, e.g. 1 percentage point or $1,000.
    pub step: f64,
}

impl ColumnInfo {
    /// A label and unit with a comparison step of 1.
    pub fn new(label: impl Into<String>, unit: Option<&str>) -> Self {
        ColumnInfo { label: label.into(), unit: unit.map(str::to_owned), step: 1.0 }
    }

    /// Sets the comparison step (ignored unless finite and positive).
    pub fn with_step(mut self, step: f64) -> Self {
        if step.is_finite() && step > 0.0 {
            self.step = step;
        }
        self
    }
}

/// Labels and units for the columns of an analysis, plus the plural noun for its areas.
#[derive(Debug, Clone, PartialEq)]
pub struct Glossary {
    areas: String,
    columns: BTreeMap<String, ColumnInfo>,
}

impl Default for Glossary {
    fn default() -> Self {
        Glossary { areas: "areas".into(), columns: BTreeMap::new() }
    }
}

impl Glossary {
    /// An empty glossary whose areas are called `areas_plural` (e.g. "districts").
    pub fn new(areas_plural: impl Into<String>) -> Self {
        Glossary { areas: areas_plural.into(), columns: BTreeMap::new() }
    }

    /// Adds or replaces a column's description.
    pub fn with_column(mut self, name: impl Into<String>, info: ColumnInfo) -> Self {
        self.columns.insert(name.into(), info);
        self
    }

    /// A glossary from a dataset's column metadata: each column's label (its name when it has
    /// none) and unit.
    pub fn from_meta(areas_plural: impl Into<String>, metas: &[ColumnMeta]) -> Self {
        let mut glossary = Glossary::new(areas_plural);
        for m in metas {
            let label = m.label.clone().unwrap_or_else(|| m.column.clone());
            let unit = m.unit.as_deref().map(str::trim).filter(|u| !u.is_empty());
            glossary.columns.insert(m.column.clone(), ColumnInfo::new(label, unit));
        }
        glossary
    }

    /// Chooses comparison steps from the data, so a sentence compares areas that differ by a
    /// realistic amount: for every numeric column of `table` still at the default step of 1,
    /// the step becomes the power of ten just below its standard deviation (an income with a
    /// spread of 8,000 is compared per 1,000; a share with a spread of 3 stays per 1).
    pub fn with_steps_from(mut self, table: &wardcast_engine::Table) -> Self {
        for column in table.columns() {
            let wardcast_engine::ColumnData::Numeric(values) = &column.data else {
                continue;
            };
            let mut info = self.column(&column.name);
            if info.step != 1.0 {
                continue;
            }
            let xs: Vec<f64> = values.iter().flatten().copied().filter(|x| x.is_finite()).collect();
            if let Some(step) = round_step(&xs) {
                info.step = step;
                self.columns.insert(column.name.clone(), info);
            }
        }
        self
    }

    /// The plural noun for the areas.
    pub fn areas(&self) -> &str {
        &self.areas
    }

    /// The singular noun for one area ("district" for "districts").
    pub fn area(&self) -> String {
        self.areas.strip_suffix('s').unwrap_or(&self.areas).to_owned()
    }

    /// A column's description; unknown columns are described by their name.
    pub fn column(&self, name: &str) -> ColumnInfo {
        self.columns.get(name).cloned().unwrap_or_else(|| ColumnInfo::new(name, None))
    }
}

/// The power of ten at or just below the sample standard deviation of `xs`; `None` when
/// there are fewer than two values or no spread.
pub fn round_step(xs: &[f64]) -> Option<f64> {
    if xs.len() < 2 {
        return None;
    }
    let n = xs.len() as f64;
    let mean = xs.iter().sum::<f64>() / n;
    let sd = (xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    if !(sd.is_finite() && sd > 0.0) {
        return None;
    }
    Some(10f64.powi(sd.log10().floor() as i32))
}

/// Where an analysis' table came from: the table itself and what the brief and the Data page
/// say about it. Shared (behind an `Arc`) by every analysis fitted on the same table.
#[derive(Debug, Clone)]
pub struct Source {
    /// A name for the table, e.g. "Larkmoor districts" (user-supplied; escaped wherever shown).
    pub name: String,
    /// The table the engine reads, keyed by area.
    pub table: Table,
    /// Column metadata: labels, units, roles, sources and vintages.
    pub columns: Vec<ColumnMeta>,
    /// The stored dataset versions read, with their checksums.
    pub checksums: Vec<DatasetChecksum>,
    /// The join that built the table, if any.
    pub join: Option<JoinReport>,
    /// Data-quality notes (from the import reports and the analyst).
    pub notes: Vec<String>,
    /// The store reference (`dataset@version`) when the table was saved in the store.
    pub dataset: Option<String>,
}

impl Source {
    /// A source with only a name and a table (no metadata, checksums, join or notes).
    pub fn bare(name: impl Into<String>, table: Table) -> Self {
        Source {
            name: name.into(),
            table,
            columns: Vec::new(),
            checksums: Vec::new(),
            join: None,
            notes: Vec::new(),
            dataset: None,
        }
    }
}

/// The diagnostics of an analysis, computed once: the engine result and its document.
#[derive(Debug)]
pub struct CheckedModel {
    /// The engine's checks (residual tables, plot data, influence, collinearity…).
    pub checks: Checks,
    /// The checks document, exactly as the JSON API and `wardcast check` write it.
    pub document: ChecksDocument,
}

/// The most what-if scenarios an analysis keeps for its brief.
pub const KEPT_SCENARIOS_MAX: usize = 20;

/// What the analyst adds to an analysis after fitting it: the model-choice results, the
/// allocation and the brief's question. Pages read a copy; the page that produces a part
/// replaces it. Kept behind a lock inside [`Analysis`], never held across an `.await`.
#[derive(Debug, Clone, Default)]
pub struct Extras {
    /// How the model was chosen (subset search, CV comparison, nested tests), once the analyst
    /// ran the search on the Contenders page.
    pub model_choice: Option<ModelChoice>,
    /// The latest allocation scenario run on the What-if page.
    pub allocation: Option<AllocationDocument>,
    /// The what-if scenarios the analyst kept for the brief, oldest first; at most
    /// [`KEPT_SCENARIOS_MAX`], the oldest dropped first.
    pub scenarios: Vec<ScenarioDocument>,
    /// The decision question for the brief.
    pub question: Option<String>,
    /// The analyst's name for the brief.
    pub author: Option<String>,
}

/// A fitted analysis: the source table, the validated spec and its fit, the fit document the
/// JSON API serves, the diagnostics (computed on first use) and the analyst's extras.
///
/// Everything but the extras is immutable once built: a changed spec is a new analysis with
/// its own id, and `parent` records where it came from.
#[derive(Debug)]
pub struct Analysis {
    id: String,
    name: String,
    glossary: Glossary,
    source: Arc<Source>,
    fitted: Fitted,
    fit: FitDocument,
    parent: Option<String>,
    checks: OnceLock<Arc<CheckedModel>>,
    extras: RwLock<Extras>,
    pages: Mutex<BTreeMap<String, Arc<String>>>,
}

/// What an analysis is built from.
#[derive(Debug, Clone)]
pub struct AnalysisParts {
    /// The id; it becomes part of the stable URL `/analyses/{id}`: 1–64 characters of lowercase
    /// letters, digits and hyphens, starting with a letter or digit.
    pub id: String,
    /// The analyst's name for it.
    pub name: String,
    /// Column labels and units.
    pub glossary: Glossary,
    /// The table and its description.
    pub source: Arc<Source>,
    /// The model.
    pub spec: ModelSpec,
    /// The analysis this one was refitted from, if any.
    pub parent: Option<String>,
}

impl Analysis {
    /// Validates the spec against the source table and fits it. Blocking numerics: call it from
    /// `spawn_blocking` inside the runtime.
    pub fn build(parts: AnalysisParts) -> Result<Self> {
        let AnalysisParts { id, name, glossary, source, spec, parent } = parts;
        if !valid_id(&id) {
            return Err(ServerError::BadRequest(format!(
                "{id:?} cannot name an analysis: use 1 to 64 lowercase letters, digits and hyphens"
            )));
        }
        let fitted = Fitted::new(&source.table, &spec)?;
        let fit = fitted.fit_document()?;
        Ok(Analysis {
            id,
            name,
            glossary,
            source,
            fitted,
            fit,
            parent,
            checks: OnceLock::new(),
            extras: RwLock::new(Extras::default()),
            pages: Mutex::new(BTreeMap::new()),
        })
    }

    /// The id used in URLs.
    pub fn id(&self) -> &str {
        &self.id
    }

    /// The analyst's name for it (user-supplied; escaped wherever shown).
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Column labels and units.
    pub fn glossary(&self) -> &Glossary {
        &self.glossary
    }

    /// The source table and its description.
    pub fn source(&self) -> &Arc<Source> {
        &self.source
    }

    /// The names of the table's numeric columns, in table order.
    pub fn numeric_columns(&self) -> Vec<&str> {
        self.source.table.columns().iter().filter(|c| c.data.is_numeric()).map(|c| c.name.as_str()).collect()
    }

    /// The engine table the model was fitted on.
    pub fn table(&self) -> &Table {
        &self.source.table
    }

    /// The spec.
    pub fn spec(&self) -> &ModelSpec {
        self.fitted.spec()
    }

    /// The validated, fitted model (engine fit and spec).
    pub fn fitted(&self) -> &Fitted {
        &self.fitted
    }

    /// The fit document, exactly as the JSON API serves it.
    pub fn fit(&self) -> &FitDocument {
        &self.fit
    }

    /// The analysis this one was refitted from.
    pub fn parent(&self) -> Option<&str> {
        self.parent.as_deref()
    }

    /// The diagnostics, computed on the first call and shared afterwards. The first call is
    /// blocking numerics (the transformation search cross-validates), so handlers make it
    /// inside `spawn_blocking` unless [`Analysis::checks_ready`] says it is done.
    pub fn checks(&self) -> Arc<CheckedModel> {
        self.checks
            .get_or_init(|| {
                let checks = self.fitted.checks();
                let document = ChecksDocument::from_checks(&checks, self.fitted.spec());
                Arc::new(CheckedModel { checks, document })
            })
            .clone()
    }

    /// Whether the diagnostics are already computed.
    pub fn checks_ready(&self) -> bool {
        self.checks.get().is_some()
    }

    /// A copy of the analyst's extras.
    pub fn extras(&self) -> Result<Extras> {
        Ok(self.extras.read().map_err(|_| poisoned())?.clone())
    }

    /// A rendered page of this analysis, rendered by `render` on the first call for `key` and
    /// kept afterwards. Only pages that depend on nothing but the analysis' immutable parts
    /// (and on what `key` encodes, such as the read-only flag) may be cached; pages that show
    /// the extras must not be. The cache is bounded: past 64 entries it starts afresh.
    pub fn cached_page(&self, key: &str, render: impl FnOnce() -> Result<String>) -> Result<Arc<String>> {
        if let Some(page) = self.pages.lock().map_err(|_| poisoned())?.get(key) {
            return Ok(page.clone());
        }
        let page = Arc::new(render()?);
        let mut pages = self.pages.lock().map_err(|_| poisoned())?;
        if pages.len() >= 64 {
            pages.clear();
        }
        pages.insert(key.to_owned(), page.clone());
        Ok(page)
    }

    /// Changes the extras under the lock.
    pub fn update_extras(&self, change: impl FnOnce(&mut Extras)) -> Result<()> {
        let mut extras = self.extras.write().map_err(|_| poisoned())?;
        change(&mut extras);
        Ok(())
    }
}

/// Whether `id` is a valid analysis id.
pub fn valid_id(id: &str) -> bool {
    !id.is_empty()
        && id.len() <= 64
        && !id.starts_with('-')
        && id.bytes().all(|b| b.is_ascii_lowercase() || b.is_ascii_digit() || b == b'-')
}

/// The session's workspace, shared by all handlers. Cheap to clone.
#[derive(Debug, Clone, Default)]
pub struct AppState {
    analyses: Arc<RwLock<BTreeMap<String, Arc<Analysis>>>>,
    jobs: Jobs,
    store: Option<Arc<Mutex<Store>>>,
    tables: TableShelf,
}

impl AppState {
    /// An empty workspace with no store (nothing is persisted).
    pub fn new() -> Self {
        AppState::default()
    }

    /// Keeps datasets and analyses in `store` as well as in memory.
    pub fn with_store(mut self, store: Store) -> Self {
        self.store = Some(Arc::new(Mutex::new(store)));
        self
    }

    /// The store, when the workspace has one. Lock it only inside `spawn_blocking`.
    pub fn store(&self) -> Option<&Arc<Mutex<Store>>> {
        self.store.as_ref()
    }

    /// The background jobs (subset searches, cross-validation, transformation searches).
    pub fn jobs(&self) -> &Jobs {
        &self.jobs
    }

    /// The tables uploaded or joined in this session (the Tables pages).
    pub fn tables(&self) -> &TableShelf {
        &self.tables
    }

    /// Adds an analysis, replacing one with the same id, and returns it shared.
    pub fn insert(&self, analysis: Analysis) -> Result<Arc<Analysis>> {
        let analysis = Arc::new(analysis);
        let mut map = self.analyses.write().map_err(|_| poisoned())?;
        map.insert(analysis.id.clone(), analysis.clone());
        Ok(analysis)
    }

    /// The analysis with this id, if any.
    pub fn get(&self, id: &str) -> Result<Option<Arc<Analysis>>> {
        let map = self.analyses.read().map_err(|_| poisoned())?;
        Ok(map.get(id).cloned())
    }

    /// All analyses, ordered by id.
    pub fn list(&self) -> Result<Vec<Arc<Analysis>>> {
        let map = self.analyses.read().map_err(|_| poisoned())?;
        Ok(map.values().cloned().collect())
    }

    /// An unused analysis id made from `name`: its slug (lowercase letters, digits and single
    /// hyphens; `analysis` when nothing is left), then `-2`, `-3`… until one is free. The id is
    /// a proposal: [`AppState::insert_new`] checks it again when the analysis is stored.
    pub fn fresh_id(&self, name: &str) -> Result<String> {
        let map = self.analyses.read().map_err(|_| poisoned())?;
        free_id(&map, &slug_of(name))
    }

    /// Adds a new analysis without replacing any: when its id was taken meanwhile (two refits
    /// named alike at the same moment), it gets the next free id made from the same slug. The
    /// check and the insertion happen under one lock.
    pub fn insert_new(&self, mut analysis: Analysis) -> Result<Arc<Analysis>> {
        let mut map = self.analyses.write().map_err(|_| poisoned())?;
        if map.contains_key(&analysis.id) {
            let base = analysis.id.trim_end_matches(|c: char| c.is_ascii_digit()).trim_end_matches('-');
            let base = if base.is_empty() { analysis.id.clone() } else { base.to_owned() };
            analysis.id = free_id(&map, &base)?;
        }
        let analysis = Arc::new(analysis);
        map.insert(analysis.id.clone(), analysis.clone());
        Ok(analysis)
    }
}

/// The slug an analysis id is made from: lowercase letters, digits and single hyphens, at most
/// 48 characters; `analysis` when nothing is left.
fn slug_of(name: &str) -> String {
    let mut slug = String::new();
    for c in name.to_lowercase().chars() {
        if c.is_ascii_lowercase() || c.is_ascii_digit() {
            slug.push(c);
        } else if !slug.ends_with('-') && !slug.is_empty() {
            slug.push('-');
        }
    }
    slug.truncate(48);
    let base = slug.trim_end_matches('-');
    if base.is_empty() { "analysis".to_owned() } else { base.to_owned() }
}

/// `base` when no analysis has it, else the first free `base-2`, `base-3`…
fn free_id(map: &BTreeMap<String, Arc<Analysis>>, base: &str) -> Result<String> {
    if !map.contains_key(base) {
        return Ok(base.to_owned());
    }
    (2u32..)
        .map(|n| format!("{base}-{n}"))
        .find(|id| !map.contains_key(id))
        .ok_or_else(|| ServerError::Internal("no free analysis id".into()))
}

fn poisoned() -> ServerError {
    ServerError::Internal("the workspace lock was poisoned by an earlier failure".into())
}

//! The in-memory workspace behind the web app: the analyses of this session and what the pages
//! need to describe them in words (column labels and units).
//!
//! The workspace sits behind one `RwLock`. Handlers take the lock only to clone an `Arc` to an
//! analysis and release it at once, so no lock is ever held across an `.await` or while a
//! page renders.

use std::collections::BTreeMap;
use std::sync::{Arc, RwLock};

use wardcast_contract::dataset::ColumnMeta;
use wardcast_contract::fit::FitDocument;

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

/// A fitted analysis as the pages show it. Immutable once built.
#[derive(Debug, Clone)]
pub struct Analysis {
    id: String,
    name: String,
    glossary: Glossary,
    fit: FitDocument,
}

impl Analysis {
    /// Builds an analysis. The id becomes part of its stable URL, so it must be 1–64 characters
    /// of lowercase letters, digits and hyphens, starting with a letter or digit.
    pub fn new(
        id: impl Into<String>,
        name: impl Into<String>,
        glossary: Glossary,
        fit: FitDocument,
    ) -> Result<Self> {
        let id = id.into();
        if !valid_id(&id) {
            return Err(ServerError::BadRequest(format!(
                "{id:?} cannot name an analysis: use 1 to 64 lowercase letters, digits and hyphens"
            )));
        }
        Ok(Analysis { id, name: name.into(), glossary, fit })
    }

    /// Builds an analysis from an engine fit and the spec it came from, through the same fit
    /// document the JSON API and the command line write.
    pub fn from_fit(
        id: impl Into<String>,
        name: impl Into<String>,
        glossary: Glossary,
        fit: &wardcast_engine::Fit,
        spec: &wardcast_contract::spec::ModelSpec,
    ) -> Result<Self> {
        Analysis::new(id, name, glossary, FitDocument::from_fit(fit, spec)?)
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

    /// The fit document, exactly as the JSON API serves it.
    pub fn fit(&self) -> &FitDocument {
        &self.fit
    }
}

/// Whether `id` is a valid analysis id.
pub fn valid_id(id: &str) -> bool {
    !id.is_empty()
        && id.len() <= 64
        && !id.starts_with('-')
        && id.bytes().all(|b| b.is_ascii_lowercase() || b.is_ascii_digit() || b == b'-')
}

/// The session's analyses, shared by all handlers. Cheap to clone.
#[derive(Debug, Clone, Default)]
pub struct AppState {
    analyses: Arc<RwLock<BTreeMap<String, Arc<Analysis>>>>,
}

impl AppState {
    /// An empty workspace.
    pub fn new() -> Self {
        AppState::default()
    }

    /// Adds an analysis, replacing one with the same id.
    pub fn insert(&self, analysis: Analysis) -> Result<()> {
        let mut map = self.analyses.write().map_err(|_| poisoned())?;
        map.insert(analysis.id.clone(), Arc::new(analysis));
        Ok(())
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
}

fn poisoned() -> ServerError {
    ServerError::Internal("the workspace lock was poisoned by an earlier failure".into())
}

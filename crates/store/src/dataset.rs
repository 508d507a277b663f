//! Loaded dataset versions, drafts of new versions, and joins on the region key.

use std::collections::{HashMap, HashSet};

use polars::prelude::DataFrame;
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::dataset::{
    ColumnMeta, ColumnRole, ColumnType, DatasetManifest, Derivation, DerivedColumn, DroppedRow, Exclusion,
    JoinKind, JoinReport, ManifestColumn, Origin,
};

use crate::derive::{self, DeriveSummary};
use crate::error::{Result, StoreError};
use crate::frame;
use crate::import::StagedImport;

/// One stored dataset version: its manifest and its columns. Immutable.
#[derive(Debug, Clone)]
pub struct Dataset {
    manifest: DatasetManifest,
    frame: DataFrame,
}

impl Dataset {
    pub(crate) fn new(manifest: DatasetManifest, frame: DataFrame) -> Self {
        Self { manifest, frame }
    }

    /// The manifest.
    pub fn manifest(&self) -> &DatasetManifest {
        &self.manifest
    }

    /// The columns.
    pub fn frame(&self) -> &DataFrame {
        &self.frame
    }

    /// The key column's name.
    pub fn key(&self) -> &str {
        &self.manifest.key
    }

    /// `dataset@version`.
    pub fn version_id(&self) -> &str {
        &self.manifest.version_id
    }

    /// Number of rows.
    pub fn nrows(&self) -> usize {
        self.frame.height()
    }

    /// The region keys, in row order.
    pub fn keys(&self) -> Result<Vec<String>> {
        frame::keys(&self.frame, &self.manifest.key)
    }

    /// The metadata of a column.
    pub fn column_meta(&self, name: &str) -> Option<&ColumnMeta> {
        self.manifest.column(name).map(|c| &c.meta)
    }

    /// The engine's table: the keys, and every other column (integers and decimals as
    /// numbers, text as text; missing cells as `None`).
    pub fn to_engine_table(&self) -> Result<wardcast_engine::Table> {
        engine_table(&self.frame, &self.manifest.key)
    }

    /// Starts a new version from this one (saved with [`crate::Store::save`]).
    pub fn draft(&self) -> Draft {
        Draft {
            frame: self.frame.clone(),
            key: self.manifest.key.clone(),
            columns: self.manifest.columns.clone(),
            derived: self.manifest.derived.clone(),
            exclusions: self.manifest.exclusions.clone(),
            dropped_rows: self.manifest.dropped_rows.clone(),
            origin: Origin::Edit { change: format!("edited from {}", self.manifest.version_id) },
            keys_verified: true,
        }
    }
}

/// Converts a frame with a key column into the engine's table (the key column becomes the
/// row keys and is not repeated as a column).
pub fn engine_table(frame: &DataFrame, key: &str) -> Result<wardcast_engine::Table> {
    let keys = frame::keys(frame, key)?;
    let mut columns = Vec::with_capacity(frame.width().saturating_sub(1));
    for col in frame.columns() {
        let name = col.name().as_str();
        if name == key {
            continue;
        }
        let column = match frame::f64_values(frame, name)? {
            Some(values) => wardcast_engine::Column::numeric(name, values),
            None => match frame::text_values(frame, name)? {
                Some(values) => wardcast_engine::Column::text(name, values),
                None => {
                    return Err(StoreError::Frame(format!("column {name:?} has an unsupported type")));
                }
            },
        };
        columns.push(column);
    }
    Ok(wardcast_engine::Table::new(keys, columns)?)
}

/// A new dataset version being prepared: from an import, a join or an edit.
#[derive(Debug, Clone)]
pub struct Draft {
    pub(crate) frame: DataFrame,
    pub(crate) key: String,
    pub(crate) columns: Vec<ManifestColumn>,
    pub(crate) derived: Vec<DerivedColumn>,
    pub(crate) exclusions: Vec<Exclusion>,
    pub(crate) dropped_rows: Vec<DroppedRow>,
    pub(crate) origin: Origin,
    /// Whether the keys are known to be present and distinct (every constructor ensures
    /// it; the check before writing runs when this is false).
    pub(crate) keys_verified: bool,
}

impl Draft {
    /// A draft from an import; refused while blocking problems remain.
    pub fn from_import(staged: &StagedImport) -> Result<Self> {
        if !staged.can_save() {
            return Err(StoreError::NotSavable { reasons: staged.blocking_reasons().join("; ") });
        }
        let key = staged
            .key()
            .ok_or_else(|| StoreError::NotSavable { reasons: "no key column was chosen".into() })?;
        Ok(Self {
            frame: staged.frame().clone(),
            key: key.to_owned(),
            columns: staged.columns().to_vec(),
            derived: Vec::new(),
            exclusions: Vec::new(),
            dropped_rows: staged.report().dropped_rows.clone(),
            origin: Origin::Import { source: staged.report().source.clone() },
            keys_verified: true,
        })
    }

    /// The columns.
    pub fn frame(&self) -> &DataFrame {
        &self.frame
    }

    /// The key column's name.
    pub fn key(&self) -> &str {
        &self.key
    }

    /// Column types and metadata.
    pub fn columns(&self) -> &[ManifestColumn] {
        &self.columns
    }

    /// Derived column specs.
    pub fn derived(&self) -> &[DerivedColumn] {
        &self.derived
    }

    /// Exclusions with reasons.
    pub fn exclusions(&self) -> &[Exclusion] {
        &self.exclusions
    }

    /// Says what changed (recorded in the manifest of an edited version).
    pub fn describe_change(&mut self, change: impl Into<String>) {
        if let Origin::Edit { change: c } = &mut self.origin {
            *c = change.into();
        }
    }

    /// Sets a column's metadata (label, unit, source, vintage, role).
    pub fn set_meta(&mut self, meta: ColumnMeta) -> Result<()> {
        let key = self.key.clone();
        let col = self
            .columns
            .iter_mut()
            .find(|c| c.meta.column == meta.column)
            .ok_or_else(|| StoreError::UnknownColumn { name: meta.column.clone() })?;
        let name = &meta.column;
        if (meta.role == ColumnRole::Key) != (*name == key) {
            return Err(StoreError::BadChoice {
                reason: format!("only the key column {key:?} has the key role; {name:?} cannot change that"),
            });
        }
        if col.column_type == ColumnType::Text && !matches!(meta.role, ColumnRole::Group | ColumnRole::Key) {
            return Err(StoreError::BadChoice {
                reason: format!(
                    "column {name:?} holds text, so it can only be a group; it cannot be a {}",
                    meta.role.name()
                ),
            });
        }
        col.meta = meta;
        Ok(())
    }

    /// Replaces the exclusions. Every key must be in the table, once, with a reason.
    pub fn set_exclusions(&mut self, exclusions: Vec<Exclusion>) -> Result<()> {
        let keys: HashSet<String> = frame::keys(&self.frame, &self.key)?.into_iter().collect();
        let mut seen = HashSet::new();
        for e in &exclusions {
            if !keys.contains(&e.key) {
                return Err(StoreError::BadChoice {
                    reason: format!("cannot exclude {:?}: no row has that key", e.key),
                });
            }
            if e.reason.trim().is_empty() {
                return Err(StoreError::BadChoice {
                    reason: format!("the exclusion of {:?} needs a reason", e.key),
                });
            }
            if !seen.insert(e.key.as_str()) {
                return Err(StoreError::BadChoice { reason: format!("{:?} is excluded twice", e.key) });
            }
        }
        self.exclusions = exclusions;
        Ok(())
    }

    /// Adds a derived column (or replaces the spec of one with the same name) and computes it.
    pub fn add_derived(&mut self, spec: DerivedColumn) -> Result<DeriveSummary> {
        let existing_plain = self.columns.iter().any(|c| c.meta.column == spec.name)
            && !self.derived.iter().any(|d| d.name == spec.name);
        if existing_plain {
            return Err(StoreError::Derive {
                name: spec.name.clone(),
                reason: "a column of that name already holds imported values".into(),
            });
        }
        let (_, summary) = derive::compute(&self.frame, &spec)?;
        match self.derived.iter_mut().find(|d| d.name == spec.name) {
            Some(d) => *d = spec,
            None => self.derived.push(spec),
        }
        self.recompute()?;
        Ok(summary)
    }

    /// Removes a derived column and its values.
    pub fn remove_derived(&mut self, name: &str) -> Result<()> {
        let before = self.derived.len();
        self.derived.retain(|d| d.name != name);
        if self.derived.len() == before {
            return Err(StoreError::UnknownColumn { name: name.to_owned() });
        }
        if let Some(d) = self.derived.iter().find(|d| d.derivation.inputs().contains(&name)) {
            return Err(StoreError::Derive {
                name: d.name.clone(),
                reason: format!("it is computed from {name:?}"),
            });
        }
        let _ = self.frame.drop_in_place(name);
        self.columns.retain(|c| c.meta.column != name);
        Ok(())
    }

    /// Recomputes every derived column from the current values and brings the column list
    /// in line with the frame. Runs on every save, so derivations follow new source data.
    pub(crate) fn recompute(&mut self) -> Result<Vec<DeriveSummary>> {
        let summaries = derive::apply_all(&mut self.frame, &self.derived)?;
        for d in &self.derived {
            let role = match d.derivation {
                Derivation::RatePer { .. } => ColumnRole::Rate,
                _ => ColumnRole::Indicator,
            };
            let mut meta = d.meta.clone().unwrap_or_else(|| ColumnMeta::new(d.name.clone(), role));
            meta.column = d.name.clone();
            if meta.role == ColumnRole::Key || meta.role == ColumnRole::Group {
                meta.role = role;
            }
            match self.columns.iter_mut().find(|c| c.meta.column == d.name) {
                Some(c) => {
                    c.column_type = ColumnType::Decimal;
                    if d.meta.is_some() {
                        c.meta = meta;
                    }
                }
                None => self.columns.push(ManifestColumn { column_type: ColumnType::Decimal, meta }),
            }
        }
        Ok(summaries)
    }

    /// Checks the draft is consistent before it is written.
    pub(crate) fn check(&self) -> Result<()> {
        if !self.keys_verified {
            frame::check_keys(&self.frame, &self.key)?;
        }
        let names: Vec<&str> = self.frame.columns().iter().map(|c| c.name().as_str()).collect();
        if names.len() != self.columns.len()
            || names.iter().zip(&self.columns).any(|(n, c)| *n != c.meta.column)
        {
            return Err(StoreError::Frame("the column list does not match the table".into()));
        }
        for (col, m) in self.frame.columns().iter().zip(&self.columns) {
            if frame::column_type(col) != Some(m.column_type) {
                return Err(StoreError::Frame(format!(
                    "column {:?} does not hold {} values",
                    m.meta.column,
                    m.column_type.name()
                )));
            }
        }
        Ok(())
    }

    /// Carries labels, derived columns and exclusions over from an earlier version (used
    /// when a new file is imported as the next version of a stored table).
    pub(crate) fn inherit(&mut self, previous: &DatasetManifest) -> Result<()> {
        for col in &mut self.columns {
            if let Some(old) = previous.column(&col.meta.column) {
                let role = col.meta.role;
                col.meta = ColumnMeta { role, ..old.meta.clone() };
            }
        }
        let present: HashSet<&str> = self.columns.iter().map(|c| c.meta.column.as_str()).collect();
        for d in &previous.derived {
            if !present.contains(d.name.as_str()) {
                self.derived.push(d.clone());
            }
        }
        let keys: HashSet<String> = frame::keys(&self.frame, &self.key)?.into_iter().collect();
        self.exclusions = previous.exclusions.iter().filter(|e| keys.contains(&e.key)).cloned().collect();
        Ok(())
    }
}

/// A table with a key that can take part in a join.
pub trait Keyed {
    /// A label for reports (a version id or a file name).
    fn label(&self) -> String;
    /// The columns.
    fn table(&self) -> &DataFrame;
    /// The key column.
    fn key_column(&self) -> Option<&str>;
    /// Column types and metadata.
    fn column_list(&self) -> &[ManifestColumn];
    /// Derived column specs.
    fn derived_specs(&self) -> &[DerivedColumn] {
        &[]
    }
    /// Exclusions.
    fn exclusion_list(&self) -> &[Exclusion] {
        &[]
    }
}

impl Keyed for Dataset {
    fn label(&self) -> String {
        self.manifest.version_id.clone()
    }
    fn table(&self) -> &DataFrame {
        &self.frame
    }
    fn key_column(&self) -> Option<&str> {
        Some(&self.manifest.key)
    }
    fn column_list(&self) -> &[ManifestColumn] {
        &self.manifest.columns
    }
    fn derived_specs(&self) -> &[DerivedColumn] {
        &self.manifest.derived
    }
    fn exclusion_list(&self) -> &[Exclusion] {
        &self.manifest.exclusions
    }
}

impl Keyed for StagedImport {
    fn label(&self) -> String {
        self.report().source.file_name.clone()
    }
    fn table(&self) -> &DataFrame {
        self.frame()
    }
    fn key_column(&self) -> Option<&str> {
        self.key()
    }
    fn column_list(&self) -> &[ManifestColumn] {
        self.columns()
    }
}

impl Keyed for Draft {
    /// The imported file's name without its extension (so a clashing right-hand column of a
    /// join is suffixed with where it came from), or "joined"/"draft" for other drafts.
    fn label(&self) -> String {
        match &self.origin {
            Origin::Import { source } => {
                let name = source.file_name.rsplit(['/', '\\']).next().unwrap_or(&source.file_name);
                let stem = name.rsplit_once('.').map_or(name, |(stem, _)| stem);
                if stem.is_empty() { "draft".into() } else { stem.to_owned() }
            }
            Origin::Join { .. } => "joined".into(),
            Origin::Edit { .. } => "draft".into(),
        }
    }
    fn table(&self) -> &DataFrame {
        &self.frame
    }
    fn key_column(&self) -> Option<&str> {
        Some(&self.key)
    }
    fn column_list(&self) -> &[ManifestColumn] {
        &self.columns
    }
    fn derived_specs(&self) -> &[DerivedColumn] {
        &self.derived
    }
    fn exclusion_list(&self) -> &[Exclusion] {
        &self.exclusions
    }
}

/// The result of a join: always a report; a draft only when neither side repeats a key.
#[derive(Debug, Clone)]
pub struct Joined {
    /// What matched and what did not.
    pub report: JoinReport,
    /// The joined table, or `None` when duplicate keys make the join ambiguous.
    pub draft: Option<Draft>,
}

fn key_values<T: Keyed + ?Sized>(t: &T) -> Result<(String, Vec<Option<String>>)> {
    let key = t
        .key_column()
        .ok_or_else(|| StoreError::Join { reason: format!("{} has no key column", t.label()) })?;
    let values = frame::text_values(t.table(), key)?.ok_or_else(|| StoreError::Join {
        reason: format!("the key column {key:?} of {} is not text", t.label()),
    })?;
    Ok((key.to_owned(), values))
}

/// Keys seen more than once, in order of first appearance.
fn repeated(values: &[Option<String>]) -> Vec<String> {
    let mut counts: HashMap<&str, usize> = HashMap::new();
    for v in values.iter().flatten() {
        *counts.entry(v).or_default() += 1;
    }
    let mut out = Vec::new();
    let mut done = HashSet::new();
    for v in values.iter().flatten() {
        if counts[v.as_str()] > 1 && done.insert(v.as_str()) {
            out.push(v.clone());
        }
    }
    out
}

/// Joins `right` onto `left` by their keys.
///
/// The report lists keys without a partner on each side and keys repeated on either side.
/// A left join keeps every left row (right values missing where no key matches); an inner
/// join keeps the rows whose key is on both sides. Rows keep the left table's order. A
/// right column whose name the left already uses gets the suffix `_<right label>`.
pub fn join<L: Keyed + ?Sized, R: Keyed + ?Sized>(left: &L, right: &R, kind: JoinKind) -> Result<Joined> {
    let (left_key, lv) = key_values(left)?;
    let (right_key, rv) = key_values(right)?;
    let mut right_index: HashMap<&str, usize> = HashMap::with_capacity(rv.len());
    for (i, v) in rv.iter().enumerate() {
        if let Some(v) = v {
            right_index.entry(v.as_str()).or_insert(i);
        }
    }
    let left_set: HashSet<&str> = lv.iter().flatten().map(String::as_str).collect();
    let mut seen = HashSet::new();
    let unmatched_left: Vec<String> = lv
        .iter()
        .flatten()
        .filter(|k| !right_index.contains_key(k.as_str()) && seen.insert(k.as_str()))
        .cloned()
        .collect();
    let mut seen = HashSet::new();
    let unmatched_right: Vec<String> = rv
        .iter()
        .flatten()
        .filter(|k| !left_set.contains(k.as_str()) && seen.insert(k.as_str()))
        .cloned()
        .collect();
    let matched = left_set.iter().filter(|k| right_index.contains_key(*k)).count();
    let duplicates_left = repeated(&lv);
    let duplicates_right = repeated(&rv);

    // Output columns and renames.
    let right_tag: String = crate::store::slug(&right.label()).replace('-', "_");
    let mut used: HashSet<String> = left.column_list().iter().map(|c| c.meta.column.clone()).collect();
    let mut renamed = Vec::new();
    let mut right_names = Vec::new();
    for c in right.column_list() {
        let name = &c.meta.column;
        if *name == right_key {
            continue;
        }
        let mut out = name.clone();
        if used.contains(&out) {
            let base = format!("{name}_{right_tag}");
            out = base.clone();
            let mut n = 2;
            while used.contains(&out) {
                out = format!("{base}_{n}");
                n += 1;
            }
            renamed.push((name.clone(), out.clone()));
        }
        used.insert(out.clone());
        right_names.push((c.clone(), out));
    }

    let mut report = JoinReport {
        schema_version: SCHEMA_VERSION.to_owned(),
        left: left.label(),
        right: right.label(),
        left_key: left_key.clone(),
        right_key: right_key.clone(),
        kind,
        matched,
        rows: 0,
        unmatched_left,
        unmatched_right,
        duplicates_left,
        duplicates_right,
        renamed,
    };
    if !report.duplicates_left.is_empty() || !report.duplicates_right.is_empty() {
        return Ok(Joined { report, draft: None });
    }

    if lv.iter().any(Option::is_none) {
        return Err(StoreError::Join { reason: format!("{} has rows without a key", report.left) });
    }

    // Row selection.
    let mut left_idx = Vec::with_capacity(lv.len());
    let mut right_idx = Vec::with_capacity(lv.len());
    for (i, v) in lv.iter().enumerate() {
        let r = v.as_deref().and_then(|k| right_index.get(k).copied());
        if kind == JoinKind::Inner && r.is_none() {
            continue;
        }
        left_idx.push(Some(i));
        right_idx.push(r);
    }
    report.rows = left_idx.len();
    let mut cols = Vec::new();
    let mut columns = Vec::new();
    for c in left.column_list() {
        let col = left
            .table()
            .column(&c.meta.column)
            .map_err(|_| StoreError::UnknownColumn { name: c.meta.column.clone() })?;
        cols.push(frame::gather(col, &left_idx, &c.meta.column)?);
        columns.push(c.clone());
    }
    let rename: HashMap<&str, &str> = report.renamed.iter().map(|(a, b)| (a.as_str(), b.as_str())).collect();
    for (c, out) in &right_names {
        let col = right
            .table()
            .column(&c.meta.column)
            .map_err(|_| StoreError::UnknownColumn { name: c.meta.column.clone() })?;
        cols.push(frame::gather(col, &right_idx, out)?);
        let mut mc = c.clone();
        mc.meta.column = out.clone();
        columns.push(mc);
    }
    let frame = DataFrame::new(left_idx.len(), cols)?;
    // Derived specs follow their columns (with renamed inputs on the right).
    let mut derived: Vec<DerivedColumn> = left.derived_specs().to_vec();
    for d in right.derived_specs() {
        let mut d = d.clone();
        let map = |s: &mut String| {
            if let Some(n) = rename.get(s.as_str()) {
                *s = (*n).to_owned();
            }
        };
        map(&mut d.name);
        match &mut d.derivation {
            Derivation::RatePer { count, population, .. } => {
                map(count);
                map(population);
            }
            Derivation::Share { part, whole } => {
                map(part);
                map(whole);
            }
            Derivation::Difference { left, right } => {
                map(left);
                map(right);
            }
            Derivation::Ratio { numerator, denominator } => {
                map(numerator);
                map(denominator);
            }
        }
        if let Some(m) = &mut d.meta {
            m.column = d.name.clone();
        }
        derived.push(d);
    }
    let kept: HashSet<&str> = left_idx.iter().flatten().filter_map(|&i| lv[i].as_deref()).collect();
    let exclusions =
        left.exclusion_list().iter().filter(|e| kept.contains(e.key.as_str())).cloned().collect();
    let draft = Draft {
        frame,
        key: left_key,
        columns,
        derived,
        exclusions,
        dropped_rows: Vec::new(),
        origin: Origin::Join { left: report.left.clone(), right: report.right.clone(), join: kind },
        // Left keys are distinct (no duplicates were reported) and present (checked above).
        keys_verified: true,
    };
    Ok(Joined { report, draft: Some(draft) })
}

//! The data directory: immutable dataset versions and saved analyses, written atomically and
//! verified at start-up.
//!
//! Layout (all names relative to the data folder):
//!
//! ```text
//! datasets/<dataset-id>/v000001.arrow   columns, Arrow IPC
//! datasets/<dataset-id>/v000001.json    manifest (DatasetManifest), with the SHA-256 of the .arrow file
//! analyses/<analysis-id>.json           saved analyses (SavedAnalysis)
//! quarantine/                           damaged or orphaned files moved aside at start-up
//! ```
//!
//! A version is written data file first, manifest second, each atomically (temp file in
//! the same folder, fsync, rename, fsync the folder). The manifest is the commit point: a
//! version exists once its manifest does. At start-up every version is read back and its
//! checksum verified; stray temp files are removed; a damaged file, or a data file without
//! a manifest (a save interrupted between the two writes), is moved to `quarantine/` with a
//! log line while the rest loads. One process at a time owns a data folder.

use std::collections::BTreeMap;
use std::io::Cursor;
use std::panic::{AssertUnwindSafe, catch_unwind};
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use polars::prelude::{DataFrame, IpcReader, IpcWriter, SerReader, SerWriter};
use sha2::{Digest, Sha256};
use wardcast_contract::SCHEMA_VERSION;
use wardcast_contract::dataset::{DatasetListing, DatasetManifest, JoinKind, Origin, SavedAnalysis};

use crate::dataset::{Dataset, Draft, join};
use crate::error::{Result, StoreError};
use crate::fsutil::{self, HashingWriter, TEMP_PREFIX, ensure_dir, rel, sync_dir, write_atomic};
use crate::import::StagedImport;

/// Rows per record batch in a data file (bounds the memory the writer needs).
const BATCH_ROWS: usize = 64 * 1024;

/// Largest saved-analysis file read on import.
const MAX_ANALYSIS_BYTES: u64 = 16 * 1024 * 1024;

/// What start-up found: counts, and one plain line per file removed or quarantined.
#[derive(Debug, Clone, Default)]
pub struct LoadReport {
    /// Log lines, in the order things happened.
    pub log: Vec<String>,
    /// Datasets loaded.
    pub datasets: usize,
    /// Dataset versions loaded and verified.
    pub versions: usize,
    /// Saved analyses loaded.
    pub analyses: usize,
    /// Files moved to the quarantine folder (their new paths).
    pub quarantined: Vec<PathBuf>,
    /// Stray temp files removed.
    pub removed: Vec<PathBuf>,
}

/// The dataset store over one data folder.
#[derive(Debug)]
pub struct Store {
    root: PathBuf,
    datasets: BTreeMap<String, Vec<DatasetManifest>>,
    analyses: BTreeMap<String, SavedAnalysis>,
}

/// A URL-safe id from a name: lower-case ASCII letters and digits joined by `-`.
pub fn slug(name: &str) -> String {
    let mut out = String::new();
    for ch in name.chars() {
        if ch.is_ascii_alphanumeric() {
            out.push(ch.to_ascii_lowercase());
        } else if !out.is_empty() && !out.ends_with('-') {
            out.push('-');
        }
    }
    let mut out: String = out.trim_end_matches('-').chars().take(48).collect();
    while out.ends_with('-') {
        out.pop();
    }
    if out.is_empty() { "table".to_owned() } else { out }
}

fn now_unix() -> u64 {
    SystemTime::now().duration_since(UNIX_EPOCH).map_or(0, |d| d.as_secs())
}

fn version_file(version: u32, ext: &str) -> String {
    format!("v{version:06}.{ext}")
}

/// Reads a data file, verifies its checksum against the manifest and parses it.
fn read_version(dir: &Path, m: &DatasetManifest) -> Result<DataFrame> {
    if m.data_file.contains(['/', '\\']) || m.data_file.starts_with('.') {
        return Err(StoreError::BadDocument {
            path: dir.join(&m.data_file),
            reason: "the data file name is not plain".into(),
        });
    }
    let path = dir.join(&m.data_file);
    let bytes = std::fs::read(&path).map_err(|e| StoreError::io("read", &path, e))?;
    if bytes.len() as u64 != m.data_bytes || fsutil::checksum(&bytes) != m.checksum {
        return Err(StoreError::Checksum { path });
    }
    let parsed = catch_unwind(AssertUnwindSafe(|| IpcReader::new(Cursor::new(bytes)).finish()));
    let frame = match parsed {
        Ok(Ok(f)) => f,
        Ok(Err(e)) => {
            return Err(StoreError::BadDocument { path, reason: e.to_string() });
        }
        Err(_) => {
            return Err(StoreError::BadDocument { path, reason: "the data file is malformed".into() });
        }
    };
    let names: Vec<&str> = frame.columns().iter().map(|c| c.name().as_str()).collect();
    let expected: Vec<&str> = m.columns.iter().map(|c| c.meta.column.as_str()).collect();
    if frame.height() != m.rows || names != expected {
        return Err(StoreError::BadDocument {
            path,
            reason: "its columns or row count differ from the manifest".into(),
        });
    }
    Ok(frame)
}

impl Store {
    /// The default data folder: `wardcast` in the user's data directory.
    pub fn default_dir() -> Option<PathBuf> {
        dirs::data_dir().map(|d| d.join("wardcast"))
    }

    /// Opens (creating if needed) a data folder, loading and verifying everything in it.
    pub fn open(root: impl Into<PathBuf>) -> Result<(Store, LoadReport)> {
        let root = root.into();
        ensure_dir(&root)?;
        for sub in ["datasets", "analyses", "quarantine"] {
            ensure_dir(&root.join(sub))?;
        }
        let mut store = Store { root, datasets: BTreeMap::new(), analyses: BTreeMap::new() };
        let mut report = LoadReport::default();
        store.load_datasets(&mut report)?;
        store.load_analyses(&mut report)?;
        report.datasets = store.datasets.len();
        report.versions = store.datasets.values().map(Vec::len).sum();
        report.analyses = store.analyses.len();
        Ok((store, report))
    }

    /// The data folder.
    pub fn root(&self) -> &Path {
        &self.root
    }

    fn list_dir(dir: &Path) -> Result<Vec<PathBuf>> {
        let mut out = Vec::new();
        for entry in std::fs::read_dir(dir).map_err(|e| StoreError::io("read", dir, e))? {
            let entry = entry.map_err(|e| StoreError::io("read", dir, e))?;
            out.push(entry.path());
        }
        out.sort();
        Ok(out)
    }

    fn remove_temp(&self, path: &Path, report: &mut LoadReport) {
        match std::fs::remove_file(path) {
            Ok(()) => {
                report.log.push(format!(
                    "removed stray temporary file {} (left by an interrupted write)",
                    rel(&self.root, path).display()
                ));
                report.removed.push(path.to_path_buf());
            }
            Err(e) => report.log.push(format!(
                "could not remove stray temporary file {}: {e}",
                rel(&self.root, path).display()
            )),
        }
    }

    fn quarantine(&self, path: &Path, why: &str, report: &mut LoadReport) {
        if !path.exists() {
            return;
        }
        let stamp = now_unix();
        let flat = rel(&self.root, path).to_string_lossy().replace(['/', '\\'], "__");
        let qdir = self.root.join("quarantine");
        let mut target = qdir.join(format!("{stamp}-{flat}"));
        let mut n = 1;
        while target.exists() {
            target = qdir.join(format!("{stamp}-{n}-{flat}"));
            n += 1;
        }
        match std::fs::rename(path, &target) {
            Ok(()) => {
                let _ = sync_dir(&qdir);
                if let Some(parent) = path.parent() {
                    let _ = sync_dir(parent);
                }
                report.log.push(format!(
                    "quarantined {}: {why}; moved to {}",
                    rel(&self.root, path).display(),
                    rel(&self.root, &target).display()
                ));
                report.quarantined.push(target);
            }
            Err(e) => report
                .log
                .push(format!("could not quarantine {} ({why}): {e}", rel(&self.root, path).display())),
        }
    }

    fn load_datasets(&mut self, report: &mut LoadReport) -> Result<()> {
        let base = self.root.join("datasets");
        for dir in Self::list_dir(&base)? {
            let Some(name) = dir.file_name().map(|n| n.to_string_lossy().into_owned()) else {
                continue;
            };
            if name.starts_with(TEMP_PREFIX) {
                self.remove_temp(&dir, report);
                continue;
            }
            if !dir.is_dir() {
                continue;
            }
            let files = Self::list_dir(&dir)?;
            let mut versions: Vec<DatasetManifest> = Vec::new();
            let mut referenced = std::collections::HashSet::new();
            for path in &files {
                let file = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
                if file.starts_with(TEMP_PREFIX) {
                    self.remove_temp(path, report);
                    continue;
                }
                if !file.ends_with(".json") {
                    continue;
                }
                let data_guess = dir.join(file.replace(".json", ".arrow"));
                let manifest: DatasetManifest = match std::fs::read(path)
                    .map_err(|e| e.to_string())
                    .and_then(|b| serde_json::from_slice(&b).map_err(|e| e.to_string()))
                {
                    Ok(m) => m,
                    Err(e) => {
                        self.quarantine(path, &format!("the manifest cannot be read ({e})"), report);
                        self.quarantine(&data_guess, "its manifest was damaged", report);
                        continue;
                    }
                };
                if manifest.schema_version != SCHEMA_VERSION
                    || manifest.dataset != name
                    || version_file(manifest.version, "json") != file
                {
                    self.quarantine(
                        path,
                        "the manifest does not belong here (schema, dataset or version differs)",
                        report,
                    );
                    continue;
                }
                match read_version(&dir, &manifest) {
                    Ok(_) => {
                        referenced.insert(manifest.data_file.clone());
                        versions.push(manifest);
                    }
                    Err(e) => {
                        let data = dir.join(&manifest.data_file);
                        let why = match &e {
                            StoreError::Checksum { .. } => {
                                "its checksum does not match the manifest".to_owned()
                            }
                            StoreError::Io { source, .. } => {
                                format!("it cannot be read ({source})")
                            }
                            other => other.to_string(),
                        };
                        self.quarantine(&data, &why, report);
                        self.quarantine(path, "its data file was damaged", report);
                    }
                }
            }
            for path in &files {
                let file = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
                if file.ends_with(".arrow") && !referenced.contains(&file) && path.exists() {
                    self.quarantine(
                        path,
                        "no manifest refers to it (a save was interrupted before its manifest was written)",
                        report,
                    );
                }
            }
            versions.sort_by_key(|m| m.version);
            if !versions.is_empty() {
                self.datasets.insert(name, versions);
            }
        }
        Ok(())
    }

    fn load_analyses(&mut self, report: &mut LoadReport) -> Result<()> {
        let base = self.root.join("analyses");
        for path in Self::list_dir(&base)? {
            let file = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
            if file.starts_with(TEMP_PREFIX) {
                self.remove_temp(&path, report);
                continue;
            }
            if !file.ends_with(".json") {
                continue;
            }
            let parsed: std::result::Result<SavedAnalysis, String> = std::fs::read(&path)
                .map_err(|e| e.to_string())
                .and_then(|b| serde_json::from_slice(&b).map_err(|e| e.to_string()));
            match parsed {
                Ok(a) if a.check_schema().is_ok() && format!("{}.json", a.id) == file => {
                    self.analyses.insert(a.id.clone(), a);
                }
                Ok(_) => {
                    self.quarantine(&path, "the analysis does not belong here (schema or id differs)", report)
                }
                Err(e) => self.quarantine(&path, &format!("the analysis cannot be read ({e})"), report),
            }
        }
        Ok(())
    }

    // ---- Datasets ----

    /// Every stored dataset with its versions, by id.
    pub fn list(&self) -> Vec<DatasetListing> {
        self.datasets
            .iter()
            .filter_map(|(id, versions)| {
                let last = versions.last()?;
                Some(DatasetListing {
                    schema_version: SCHEMA_VERSION.to_owned(),
                    dataset: id.clone(),
                    name: last.name.clone(),
                    versions: versions.iter().map(|m| m.version).collect(),
                    rows: last.rows,
                    columns: last.columns.len(),
                })
            })
            .collect()
    }

    /// The manifests of one dataset, oldest first.
    pub fn versions(&self, dataset: &str) -> Result<&[DatasetManifest]> {
        let id = self.resolve_dataset(dataset)?;
        Ok(self.datasets.get(&id).map(Vec::as_slice).unwrap_or_default())
    }

    fn resolve_dataset(&self, name: &str) -> Result<String> {
        if self.datasets.contains_key(name) {
            return Ok(name.to_owned());
        }
        if let Some((id, _)) = self.datasets.iter().find(|(_, v)| v.last().is_some_and(|m| m.name == name)) {
            return Ok(id.clone());
        }
        let s = slug(name);
        if self.datasets.contains_key(&s) {
            return Ok(s);
        }
        Err(StoreError::UnknownDataset { name: name.to_owned() })
    }

    /// The manifest of `dataset`, `dataset@latest` or `dataset@N` (by id or name).
    pub fn manifest(&self, reference: &str) -> Result<&DatasetManifest> {
        let (name, version) = match reference.rsplit_once('@') {
            Some((n, v)) => (n, Some(v)),
            None => (reference, None),
        };
        let id = self.resolve_dataset(name)?;
        let versions =
            self.datasets.get(&id).ok_or_else(|| StoreError::UnknownDataset { name: name.to_owned() })?;
        match version {
            None | Some("latest") => {
                versions.last().ok_or(StoreError::UnknownDataset { name: name.to_owned() })
            }
            Some(v) => {
                let n: u32 = v
                    .trim_start_matches('v')
                    .parse()
                    .map_err(|_| StoreError::UnknownVersion { dataset: id.clone(), version: v.to_owned() })?;
                versions
                    .iter()
                    .find(|m| m.version == n)
                    .ok_or(StoreError::UnknownVersion { dataset: id.clone(), version: v.to_owned() })
            }
        }
    }

    /// Loads a version (see [`Store::manifest`] for references), verifying its checksum.
    pub fn load(&self, reference: &str) -> Result<Dataset> {
        let m = self.manifest(reference)?;
        let frame = read_version(&self.root.join("datasets").join(&m.dataset), m)?;
        Ok(Dataset::new(m.clone(), frame))
    }

    /// Saves an import as a new dataset, or as the next version of the dataset with that
    /// name (labels, derived columns and exclusions whose keys remain are carried over).
    pub fn save_import(&mut self, name: &str, staged: &StagedImport) -> Result<DatasetManifest> {
        let mut draft = Draft::from_import(staged)?;
        if let Ok(previous) = self.manifest(name) {
            let previous = previous.clone();
            draft.inherit(&previous)?;
        }
        self.save(name, draft)
    }

    /// Saves a draft as the next version of the named dataset (created if new). Derived
    /// columns are recomputed from the draft's values first.
    pub fn save(&mut self, name: &str, mut draft: Draft) -> Result<DatasetManifest> {
        if name.trim().is_empty() {
            return Err(StoreError::BadChoice { reason: "the table needs a name".into() });
        }
        draft.recompute()?;
        draft.check()?;
        let id = self.resolve_dataset(name).unwrap_or_else(|_| slug(name));
        let version = self.datasets.get(&id).and_then(|v| v.last()).map_or(1, |m| m.version + 1);
        let dir = self.root.join("datasets").join(&id);
        ensure_dir(&dir)?;
        let data_file = version_file(version, "arrow");
        // Record batches of bounded size: zero-copy slices stacked as chunks.
        let mut frame = draft.frame.clone();
        if frame.height() > BATCH_ROWS && frame.first_col_n_chunks() != frame.height().div_ceil(BATCH_ROWS) {
            let mut batched = frame.slice(0, BATCH_ROWS);
            let mut offset = BATCH_ROWS;
            while offset < frame.height() {
                batched.vstack_mut(&frame.slice(offset as i64, BATCH_ROWS))?;
                offset += BATCH_ROWS;
            }
            frame = batched;
        }
        let (checksum, data_bytes) = write_atomic(&dir, &data_file, |w| {
            let mut hw = HashingWriter::new(w);
            let mut writer = IpcWriter::new(&mut hw).with_parallel(false);
            writer.finish(&mut frame)?;
            Ok(hw.finish())
        })?;
        drop(frame);
        let manifest = DatasetManifest {
            schema_version: SCHEMA_VERSION.to_owned(),
            dataset: id.clone(),
            name: name.trim().to_owned(),
            version,
            version_id: format!("{id}@{version}"),
            created_unix: now_unix(),
            origin: draft.origin,
            key: draft.key,
            rows: draft.frame.height(),
            columns: draft.columns,
            derived: draft.derived,
            exclusions: draft.exclusions,
            dropped_rows: draft.dropped_rows,
            data_file,
            data_bytes,
            checksum,
        };
        write_atomic(&dir, &version_file(version, "json"), |w| {
            serde_json::to_writer_pretty(w, &manifest).map_err(|e| StoreError::Frame(e.to_string()))
        })?;
        self.datasets.entry(id).or_default().push(manifest.clone());
        Ok(manifest)
    }

    /// Rebuilds a joined dataset when one of its sources has a newer version: joins the
    /// latest versions, recomputes its derived columns and keeps its labels and
    /// exclusions. Returns the new version, or `None` when it is up to date or not a join.
    pub fn refresh(&mut self, dataset: &str) -> Result<Option<DatasetManifest>> {
        let current = self.manifest(dataset)?.clone();
        let Origin::Join { left, right, join: kind } = &current.origin else {
            return Ok(None);
        };
        let base = |v: &str| v.rsplit_once('@').map_or(v.to_owned(), |(d, _)| d.to_owned());
        let new_left = self.manifest(&base(left))?.version_id.clone();
        let new_right = self.manifest(&base(right))?.version_id.clone();
        if new_left == *left && new_right == *right {
            return Ok(None);
        }
        let joined = join(&self.load(&new_left)?, &self.load(&new_right)?, *kind)?;
        let Some(mut draft) = joined.draft else {
            return Err(StoreError::Join { reason: "the new source versions repeat keys".into() });
        };
        for c in &mut draft.columns {
            if let Some(old) = current.column(&c.meta.column) {
                c.meta = old.meta.clone();
            }
        }
        let present: std::collections::HashSet<String> =
            draft.columns.iter().map(|c| c.meta.column.clone()).collect();
        for d in &current.derived {
            if !draft.derived.iter().any(|x| x.name == d.name) && !present.contains(&d.name) {
                draft.derived.push(d.clone());
            }
        }
        // Exclusions: those the new left version carries, plus this table's own for rows
        // still present.
        let keys: std::collections::HashSet<String> =
            crate::frame::keys(&draft.frame, &draft.key)?.into_iter().collect();
        for e in &current.exclusions {
            if keys.contains(&e.key) && !draft.exclusions.iter().any(|x| x.key == e.key) {
                draft.exclusions.push(e.clone());
            }
        }
        let name = current.name.clone();
        self.save(&name, draft).map(Some)
    }

    /// Joins two stored versions (references as for [`Store::manifest`]).
    pub fn join(&self, left: &str, right: &str, kind: JoinKind) -> Result<crate::dataset::Joined> {
        join(&self.load(left)?, &self.load(right)?, kind)
    }

    // ---- Saved analyses ----

    /// Every saved analysis, by id.
    pub fn analyses(&self) -> impl Iterator<Item = &SavedAnalysis> {
        self.analyses.values()
    }

    /// One saved analysis.
    pub fn analysis(&self, id: &str) -> Result<&SavedAnalysis> {
        self.analyses.get(id).ok_or_else(|| StoreError::UnknownAnalysis { id: id.to_owned() })
    }

    fn new_id(&self, analysis: &SavedAnalysis) -> String {
        use std::sync::atomic::{AtomicU64, Ordering};
        static N: AtomicU64 = AtomicU64::new(0);
        loop {
            let mut h = Sha256::new();
            let nanos = SystemTime::now().duration_since(UNIX_EPOCH).map_or(0, |d| d.as_nanos());
            h.update(nanos.to_le_bytes());
            h.update(std::process::id().to_le_bytes());
            h.update(N.fetch_add(1, Ordering::Relaxed).to_le_bytes());
            h.update(analysis.title.as_bytes());
            h.update(analysis.dataset_version.as_bytes());
            let id = hex::encode(&h.finalize()[..8]);
            if !self.analyses.contains_key(&id) {
                return id;
            }
        }
    }

    /// Saves an analysis (new when its id is empty, else replacing the one with that id)
    /// and returns it as stored, with its id and times.
    pub fn save_analysis(&mut self, mut analysis: SavedAnalysis) -> Result<SavedAnalysis> {
        analysis.check_schema()?;
        let bad = |reason: String| StoreError::BadAnalysis { reason };
        if analysis.title.trim().is_empty() {
            return Err(bad("it needs a title".into()));
        }
        self.manifest(&analysis.dataset_version).map_err(|e| {
            bad(format!("its dataset version {:?} is not stored ({e})", analysis.dataset_version))
        })?;
        if !analysis.dataset_version.contains('@') {
            return Err(bad(format!(
                "the dataset version {:?} must name a version, like {}@1",
                analysis.dataset_version, analysis.dataset_version
            )));
        }
        analysis.model_spec.validate().map_err(|e| bad(format!("its model spec is invalid ({e})")))?;
        if analysis.cv.folds < 2 || analysis.cv.seeds.is_empty() {
            return Err(bad("cross-validation needs at least 2 folds and one seed".into()));
        }
        if analysis.id.is_empty() {
            analysis.id = self.new_id(&analysis);
        } else if !SavedAnalysis::is_valid_id(&analysis.id) {
            return Err(bad(format!("{:?} is not a valid id (letters, digits, - and _ only)", analysis.id)));
        }
        let now = now_unix();
        analysis.created_unix = self.analyses.get(&analysis.id).map_or(now, |a| a.created_unix);
        analysis.updated_unix = now;
        let dir = self.root.join("analyses");
        write_atomic(&dir, &format!("{}.json", analysis.id), |w| {
            serde_json::to_writer_pretty(w, &analysis).map_err(|e| StoreError::Frame(e.to_string()))
        })?;
        self.analyses.insert(analysis.id.clone(), analysis.clone());
        Ok(analysis)
    }

    /// Deletes a saved analysis.
    pub fn delete_analysis(&mut self, id: &str) -> Result<()> {
        if self.analyses.remove(id).is_none() {
            return Err(StoreError::UnknownAnalysis { id: id.to_owned() });
        }
        let dir = self.root.join("analyses");
        let path = dir.join(format!("{id}.json"));
        std::fs::remove_file(&path).map_err(|e| StoreError::io("remove", &path, e))?;
        sync_dir(&dir)
    }

    /// Writes a saved analysis to a JSON file (atomically).
    pub fn export_analysis(&self, id: &str, path: &Path) -> Result<()> {
        let analysis = self.analysis(id)?;
        let dir = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).ok_or_else(|| {
            StoreError::BadChoice { reason: format!("{} is not a file name", path.display()) }
        })?;
        write_atomic(&dir, &name, |w| {
            serde_json::to_writer_pretty(w, analysis).map_err(|e| StoreError::Frame(e.to_string()))
        })
    }

    /// Reads an exported analysis and saves it. It keeps its id unless another, different
    /// analysis already has it, in which case it gets a new one.
    pub fn import_analysis(&mut self, path: &Path) -> Result<SavedAnalysis> {
        let meta = std::fs::metadata(path).map_err(|e| StoreError::io("read", path, e))?;
        if meta.len() > MAX_ANALYSIS_BYTES {
            return Err(StoreError::TooLarge { bytes: meta.len(), limit: MAX_ANALYSIS_BYTES });
        }
        let bytes = std::fs::read(path).map_err(|e| StoreError::io("read", path, e))?;
        let mut analysis: SavedAnalysis = serde_json::from_slice(&bytes)
            .map_err(|e| StoreError::BadDocument { path: path.to_path_buf(), reason: e.to_string() })?;
        analysis.check_schema()?;
        if let Some(existing) = self.analyses.get(&analysis.id) {
            let same = SavedAnalysis { created_unix: 0, updated_unix: 0, ..existing.clone() }
                == SavedAnalysis { created_unix: 0, updated_unix: 0, ..analysis.clone() };
            if !same {
                analysis.id = String::new();
            }
        } else if !SavedAnalysis::is_valid_id(&analysis.id) {
            analysis.id = String::new();
        }
        self.save_analysis(analysis)
    }
}

//! Dataset documents: import reports, column metadata, manifests and saved analyses.
//!
//! These are the JSON forms of what the store produces and keeps on disk. The store fills
//! them; the CLI prints them with `--json`; the web app renders them. Every document carries
//! `schema_version` (see [`crate::SCHEMA_VERSION`]).
//!
//! Row numbers in import documents count the way a spreadsheet shows them: the header is
//! row 1, so the first data row is row 2. In a CSV file a quoted field may span lines, so a
//! row number counts records, not lines.
//!
//! # The saved-analysis file
//!
//! [`SavedAnalysis`] is also the export format (`*.wardcast-analysis.json`): one JSON object
//! with the fields documented on the type, `schema_version` first. A reader refuses a file
//! whose `schema_version` it does not know ([`SavedAnalysis::check_schema`]). Results are
//! never stored in it: the brief is recomputed from the dataset version and settings.

use serde::{Deserialize, Serialize};

use crate::{ContractError, Result, SCHEMA_VERSION};

fn schema() -> String {
    SCHEMA_VERSION.to_owned()
}

fn check_schema(found: &str) -> Result<()> {
    if found == SCHEMA_VERSION {
        Ok(())
    } else {
        Err(ContractError::SchemaVersion { found: found.to_owned(), expected: SCHEMA_VERSION.to_owned() })
    }
}

/// The storage type of a column.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ColumnType {
    /// Whole numbers.
    Integer,
    /// Numbers with a fractional part.
    Decimal,
    /// Text (names, codes, categories).
    Text,
}

impl ColumnType {
    /// The plain name used in reports and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            ColumnType::Integer => "integer",
            ColumnType::Decimal => "decimal",
            ColumnType::Text => "text",
        }
    }

    /// Parses `integer`, `decimal` or `text`.
    pub fn parse(text: &str) -> Result<Self> {
        match text.trim().to_ascii_lowercase().as_str() {
            "integer" | "int" => Ok(ColumnType::Integer),
            "decimal" | "number" | "float" => Ok(ColumnType::Decimal),
            "text" | "string" => Ok(ColumnType::Text),
            other => Err(ContractError::InvalidField {
                field: "type".into(),
                reason: format!("{other:?} is not a column type; use integer, decimal or text"),
            }),
        }
    }

    /// Whether values are numbers.
    pub fn is_numeric(self) -> bool {
        !matches!(self, ColumnType::Text)
    }
}

/// What a column means to the analysis; the validation checks use it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ColumnRole {
    /// The region key (one row per area).
    Key,
    /// A count of events, e.g. incidents; never negative.
    Count,
    /// A population or other denominator; never negative.
    Population,
    /// A rate, e.g. incidents per 10,000 residents.
    Rate,
    /// A numeric indicator used as a predictor.
    Indicator,
    /// A group or category (text).
    Group,
}

impl ColumnRole {
    /// The plain name used in reports and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            ColumnRole::Key => "key",
            ColumnRole::Count => "count",
            ColumnRole::Population => "population",
            ColumnRole::Rate => "rate",
            ColumnRole::Indicator => "indicator",
            ColumnRole::Group => "group",
        }
    }

    /// Parses a role name (`key`, `count`, `population`, `rate`, `indicator`, `group` or
    /// `category`).
    pub fn parse(text: &str) -> Result<Self> {
        match text.trim().to_ascii_lowercase().as_str() {
            "key" => Ok(ColumnRole::Key),
            "count" => Ok(ColumnRole::Count),
            "population" => Ok(ColumnRole::Population),
            "rate" => Ok(ColumnRole::Rate),
            "indicator" => Ok(ColumnRole::Indicator),
            "group" | "category" => Ok(ColumnRole::Group),
            other => Err(ContractError::InvalidField {
                field: "role".into(),
                reason: format!(
                    "{other:?} is not a column role; use key, count, population, rate, indicator or group"
                ),
            }),
        }
    }
}

/// Descriptive metadata of one column; the brief uses it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ColumnMeta {
    /// The column name in the table.
    pub column: String,
    /// A readable label, e.g. "Vacant homes".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    /// The unit, e.g. "% of homes".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unit: Option<String>,
    /// The agency the values come from.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<String>,
    /// The year the data describe.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub vintage: Option<i32>,
    /// The column's role.
    pub role: ColumnRole,
}

impl ColumnMeta {
    /// Metadata with only a role.
    pub fn new(column: impl Into<String>, role: ColumnRole) -> Self {
        Self { column: column.into(), label: None, unit: None, source: None, vintage: None, role }
    }
}

/// Where the import read its values from and how.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SourceInfo {
    /// The file name as given (no folders).
    pub file_name: String,
    /// `csv` or `xlsx`.
    pub format: String,
    /// The file size in bytes.
    pub bytes: u64,
    /// The text encoding used, e.g. `utf-8`, `utf-8 with byte-order mark`, `utf-16le`,
    /// `windows-1252`, `latin1`. Empty for workbooks.
    pub encoding: String,
    /// The field delimiter of a CSV file, as a word: `comma`, `semicolon`, `tab` or `pipe`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub delimiter: Option<String>,
    /// How the delimiter was chosen.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub delimiter_note: Option<String>,
    /// The decimal separator in a CSV file: `point` or `comma`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub decimal_separator: Option<String>,
    /// How the decimal separator was chosen (shown so the choice can be changed).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub decimal_note: Option<String>,
    /// The worksheet read from a workbook.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sheet: Option<String>,
    /// All worksheets of a workbook, in order.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub sheets: Vec<String>,
}

/// The summary of one column in an import report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ColumnSummary {
    /// The column name.
    pub column: String,
    /// The type used.
    #[serde(rename = "type")]
    pub column_type: ColumnType,
    /// The type the values suggested.
    pub inferred_type: ColumnType,
    /// Why that type was inferred, in words.
    pub type_note: String,
    /// The role used.
    pub role: ColumnRole,
    /// Why that role was inferred, or that the analyst chose it.
    pub role_note: String,
    /// Non-missing values.
    pub count: usize,
    /// Missing (empty) values, plus text cells treated as missing by the analyst's choice.
    pub missing: usize,
    /// Distinct non-missing values (text columns; not counted for numbers).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub distinct: Option<usize>,
    /// Smallest value (numeric columns).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub min: Option<f64>,
    /// Largest value (numeric columns).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max: Option<f64>,
    /// Mean (numeric columns).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mean: Option<f64>,
    /// Median (numeric columns).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub median: Option<f64>,
}

/// The kinds of problem an import report lists.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ProblemKind {
    /// Text in a column whose other values are numbers.
    TextInNumeric,
    /// The same key on more than one row.
    DuplicateKey,
    /// A row with an empty key.
    BlankKey,
    /// A column holding one value on every row.
    ConstantColumn,
    /// A column with no values at all.
    EmptyColumn,
    /// A negative value in a count or population column.
    NegativeCount,
    /// A workbook cell holding a formula; its last saved result is used.
    Formula,
}

/// One offending cell.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ProblemCell {
    /// The row number (header = row 1).
    pub row: usize,
    /// The value as written in the file (for formulas, the formula).
    pub value: String,
}

/// One problem, with the first offending cells and the total.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Problem {
    /// What is wrong.
    pub kind: ProblemKind,
    /// The column concerned.
    pub column: String,
    /// A plain sentence saying what is wrong.
    pub message: String,
    /// How many cells or rows are affected.
    pub total: usize,
    /// The first offending cells (at most 20).
    pub examples: Vec<ProblemCell>,
    /// Whether saving is refused until the analyst resolves it.
    pub blocks_saving: bool,
    /// What the analyst can do about it.
    pub remedy: String,
}

/// A row the analyst dropped, with the reason; recorded in the dataset manifest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DroppedRow {
    /// The row number in the source file (header = row 1).
    pub row: usize,
    /// The row's key as written (may be empty).
    pub key: String,
    /// Why it was dropped.
    pub reason: String,
}

/// The validation report of an import, shown before anything is saved.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ImportReport {
    /// The schema version.
    #[serde(default = "schema")]
    pub schema_version: String,
    /// The source file and how it was read.
    pub source: SourceInfo,
    /// Data rows kept (dropped rows excluded).
    pub rows: usize,
    /// The key column, if one was detected or chosen.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub key: Option<String>,
    /// How the key column was found.
    pub key_note: String,
    /// One summary per column, in file order.
    pub columns: Vec<ColumnSummary>,
    /// Problems found, each with the first offending cells.
    pub problems: Vec<Problem>,
    /// Rows the analyst chose to drop, with reasons.
    pub dropped_rows: Vec<DroppedRow>,
    /// Other remarks, e.g. skipped blank lines.
    pub notes: Vec<String>,
    /// Whether the table can be saved as it stands (no blocking problem left).
    pub can_save: bool,
}

/// Join types offered.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum JoinKind {
    /// Only keys present on both sides.
    Inner,
    /// Every row of the left table; right columns missing where no key matches.
    Left,
}

/// What a join matched and what it did not.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct JoinReport {
    /// The schema version.
    #[serde(default = "schema")]
    pub schema_version: String,
    /// The left table (a version id or a name).
    pub left: String,
    /// The right table.
    pub right: String,
    /// The key column on the left.
    pub left_key: String,
    /// The key column on the right.
    pub right_key: String,
    /// The join type.
    pub kind: JoinKind,
    /// Keys found on both sides.
    pub matched: usize,
    /// Rows in the result.
    pub rows: usize,
    /// Left keys with no partner on the right, in left-table order.
    pub unmatched_left: Vec<String>,
    /// Right keys with no partner on the left, in right-table order.
    pub unmatched_right: Vec<String>,
    /// Keys appearing more than once on the left.
    pub duplicates_left: Vec<String>,
    /// Keys appearing more than once on the right.
    pub duplicates_right: Vec<String>,
    /// Right columns renamed because the left already had the name: `(old, new)`.
    pub renamed: Vec<(String, String)>,
}

/// A derivation over named columns (structured, not a text formula).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Derivation {
    /// `count / population × per`, e.g. incidents per 10,000 residents.
    RatePer {
        /// The count column.
        count: String,
        /// The population column.
        population: String,
        /// The base, e.g. 10000.
        per: f64,
    },
    /// `part / whole × 100`, a percentage share.
    Share {
        /// The part.
        part: String,
        /// The whole.
        whole: String,
    },
    /// `left − right`.
    Difference {
        /// The minuend.
        left: String,
        /// The subtrahend.
        right: String,
    },
    /// `numerator / denominator`.
    Ratio {
        /// The numerator.
        numerator: String,
        /// The denominator.
        denominator: String,
    },
}

impl Derivation {
    /// The source columns, in order.
    pub fn inputs(&self) -> [&str; 2] {
        match self {
            Derivation::RatePer { count, population, .. } => [count, population],
            Derivation::Share { part, whole } => [part, whole],
            Derivation::Difference { left, right } => [left, right],
            Derivation::Ratio { numerator, denominator } => [numerator, denominator],
        }
    }

    /// A plain description, e.g. `incidents per 10000 of population`.
    pub fn describe(&self) -> String {
        match self {
            Derivation::RatePer { count, population, per } => format!("{count} per {per} of {population}"),
            Derivation::Share { part, whole } => format!("{part} as a percentage of {whole}"),
            Derivation::Difference { left, right } => format!("{left} minus {right}"),
            Derivation::Ratio { numerator, denominator } => format!("{numerator} divided by {denominator}"),
        }
    }
}

/// A derived column: its name and how it is computed. Recomputed whenever the table it
/// lives in gets a new version.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DerivedColumn {
    /// The new column's name.
    pub name: String,
    /// How it is computed.
    pub derivation: Derivation,
    /// Its metadata (label, unit…); the role defaults to rate for rates, else indicator.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub meta: Option<ColumnMeta>,
}

/// A row left out of models, with the reason. The row stays in the table.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Exclusion {
    /// The region key.
    pub key: String,
    /// Why it is left out.
    pub reason: String,
}

/// How a dataset version came about.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Origin {
    /// Imported from a file.
    Import {
        /// How the file was read.
        source: SourceInfo,
    },
    /// Joined from two stored versions.
    Join {
        /// The left version id.
        left: String,
        /// The right version id.
        right: String,
        /// The join type.
        join: JoinKind,
    },
    /// Changed from an earlier version (metadata, exclusions, derived columns).
    Edit {
        /// What changed, in words.
        change: String,
    },
}

/// One column of a stored version: its type and metadata.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ManifestColumn {
    /// The storage type.
    #[serde(rename = "type")]
    pub column_type: ColumnType,
    /// Its metadata (name, role, label…).
    pub meta: ColumnMeta,
}

/// The manifest beside every stored dataset version. A version exists once its manifest is
/// written; the manifest holds the checksum of the columnar file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DatasetManifest {
    /// The schema version.
    #[serde(default = "schema")]
    pub schema_version: String,
    /// The dataset id (URL-safe, derived from its name).
    pub dataset: String,
    /// The name the analyst gave.
    pub name: String,
    /// The version number, from 1.
    pub version: u32,
    /// `dataset@version`, the id other documents use.
    pub version_id: String,
    /// Seconds since 1970-01-01 UTC when it was saved.
    pub created_unix: u64,
    /// How it came about.
    pub origin: Origin,
    /// The key column.
    pub key: String,
    /// Number of rows.
    pub rows: usize,
    /// Columns in table order, the key first.
    pub columns: Vec<ManifestColumn>,
    /// Derived columns, recomputed from their sources on every new version.
    #[serde(default)]
    pub derived: Vec<DerivedColumn>,
    /// Rows left out of models, with reasons (the rows stay in the table).
    #[serde(default)]
    pub exclusions: Vec<Exclusion>,
    /// Rows dropped at import, with reasons.
    #[serde(default)]
    pub dropped_rows: Vec<DroppedRow>,
    /// The columnar file's name, beside the manifest.
    pub data_file: String,
    /// Size of the columnar file in bytes.
    pub data_bytes: u64,
    /// `sha256:` and the hex SHA-256 of the columnar file.
    pub checksum: String,
}

impl DatasetManifest {
    /// Refuses a manifest written under another schema.
    pub fn check_schema(&self) -> Result<()> {
        check_schema(&self.schema_version)
    }

    /// The metadata of a column.
    pub fn column(&self, name: &str) -> Option<&ManifestColumn> {
        self.columns.iter().find(|c| c.meta.column == name)
    }
}

/// One line of `wardcast tables`: a stored dataset and its versions.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DatasetListing {
    /// The schema version.
    #[serde(default = "schema")]
    pub schema_version: String,
    /// The dataset id.
    pub dataset: String,
    /// Its name.
    pub name: String,
    /// Version numbers, oldest first.
    pub versions: Vec<u32>,
    /// Rows in the latest version.
    pub rows: usize,
    /// Columns in the latest version.
    pub columns: usize,
}

/// Cross-validation settings of a saved analysis.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct CvSettings {
    /// Number of folds (k); equal to the number of rows for leave-one-out.
    pub folds: u32,
    /// Seeds of the fold assignments, one per repeat.
    pub seeds: Vec<u64>,
}

/// Everything needed to regenerate a brief deterministically. Results are recomputed from
/// these settings, never stored.
///
/// This is also the export file format: a JSON object with these fields. Unknown
/// `schema_version` values are refused on import.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SavedAnalysis {
    /// The schema version (`wardcast.v1`).
    #[serde(default = "schema")]
    pub schema_version: String,
    /// The stable id (URL-safe letters and digits), assigned when first saved.
    #[serde(default)]
    pub id: String,
    /// A short title.
    pub title: String,
    /// The dataset version analysed (`dataset@version`).
    pub dataset_version: String,
    /// The decision question the brief answers.
    pub question: String,
    /// Who prepared it.
    pub author: String,
    /// The model spec: response, predictors with their transforms, weights, and the rows
    /// left out with their reasons.
    pub model_spec: crate::spec::ModelSpec,
    /// Cross-validation folds and seeds.
    pub cv: CvSettings,
    /// Scenario settings: the kept what-if scenarios' settings and the brief's candidate
    /// predictors, read as [`crate::scenario::SavedScenarios`]; never results.
    #[serde(default)]
    pub scenario: serde_json::Value,
    /// Allocation settings (budget rules), as the allocation page writes them.
    #[serde(default)]
    pub allocation: serde_json::Value,
    /// Seconds since 1970-01-01 UTC when first saved.
    #[serde(default)]
    pub created_unix: u64,
    /// Seconds since 1970-01-01 UTC when last saved.
    #[serde(default)]
    pub updated_unix: u64,
}

impl SavedAnalysis {
    /// Refuses a document written under another schema, here or in its model spec.
    pub fn check_schema(&self) -> Result<()> {
        check_schema(&self.schema_version)?;
        check_schema(&self.model_spec.schema_version)
    }

    /// Whether `id` is a usable stable id: 1 to 64 ASCII letters, digits, `-` or `_`.
    pub fn is_valid_id(id: &str) -> bool {
        !id.is_empty()
            && id.len() <= 64
            && id.bytes().all(|b| b.is_ascii_alphanumeric() || b == b'-' || b == b'_')
    }
}

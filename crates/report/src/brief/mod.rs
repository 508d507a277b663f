//! The budgeting brief: one document model built from the analysis, rendered as HTML, PDF,
//! CSV and XLSX.
//!
//! [`BriefInput`] gathers the contract documents of one analysis (fit, checks, model choice,
//! kept what-if scenarios, allocation, column metadata, join report, checksums, spec) with the
//! analyst's question and name, the date and the wardcast version. [`Brief::build`] turns it
//! into eleven sections of plain blocks (paragraphs, lists, tables, charts); the renderers in
//! [`html`], [`pdf`] and [`tables`] only lay those blocks out, so every format says the same
//! thing.
//!
//! The limitations section is not optional: [`BriefInput`] has no field that could switch it
//! off (unknown fields are refused when it is read from JSON), [`Brief::build`] always writes
//! it from the analysis, [`Limitations::new`] refuses an empty list or an empty caution, and
//! every renderer checks it is present before writing anything.
//!
//! # Use
//!
//! ```text
//! let input = BriefInput { question, author, date, wardcast_version, fit, checks: Some(checks), .. };
//! let brief = Brief::build(&input)?;
//! let page = html::render(&brief)?;                                  // brief.html
//! let pdf = pdf::render(&brief, &pdf::PdfOptions::default())?;       // brief.pdf (A4)
//! let csv = tables::to_csv(&brief)?;                                 // tables.csv
//! let xlsx = tables::to_xlsx(&brief)?;                               // tables.xlsx
//! ```

mod allocation;
mod build;
mod choice;
pub use choice::{ChoiceCv, from_selection, model_choice};
pub mod html;
pub mod pdf;
pub mod tables;
pub mod text;

use serde::{Deserialize, Serialize};
use wardcast_contract::checks::ChecksDocument;
use wardcast_contract::dataset::{ColumnMeta, JoinReport};
use wardcast_contract::fit::{FitDocument, PredictionDoc};

use crate::{ReportError, Result};

/// The checksum of one dataset version the analysis read.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DatasetChecksum {
    /// The version id, `dataset@version`.
    pub version_id: String,
    /// `sha256:` and the hex digest of the stored columnar file.
    pub checksum: String,
}

/// One candidate model in the model-choice comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CandidateModel {
    /// The predictor terms of the candidate.
    pub predictors: Vec<String>,
    /// Adjusted R².
    pub adj_r_squared: f64,
    /// Mallows' Cp, when computed.
    #[serde(default)]
    pub cp: Option<f64>,
    /// AIC, when computed.
    #[serde(default)]
    pub aic: Option<f64>,
    /// SBC, when computed.
    #[serde(default)]
    pub sbc: Option<f64>,
    /// PRESS, when computed.
    #[serde(default)]
    pub press: Option<f64>,
    /// Mean cross-validated RMSE over the repeats, when computed.
    #[serde(default)]
    pub cv_rmse: Option<f64>,
    /// Standard deviation of the cross-validated RMSE over the repeats.
    #[serde(default)]
    pub cv_rmse_sd: Option<f64>,
    /// Whether this is the model the brief reports.
    #[serde(default)]
    pub chosen: bool,
}

/// A partial F test between two nested models.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NestedTest {
    /// The terms of the smaller model.
    pub smaller: Vec<String>,
    /// The terms the larger model adds.
    pub added: Vec<String>,
    /// The F statistic; absent when undefined.
    pub f: Option<f64>,
    /// Numerator degrees of freedom.
    pub df_num: usize,
    /// Denominator degrees of freedom.
    pub df_den: usize,
    /// The p-value; absent when undefined.
    pub p_value: Option<f64>,
}

/// How the model was chosen: the subset search, the CV comparison and the nested tests.
///
/// This is the brief's view of the selection results; the caller fills it from the selection
/// document.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelChoice {
    /// The search, in words (e.g. "exact best subsets of 7 candidate indicators").
    pub search: String,
    /// The criteria compared, e.g. "adjusted R²", "Mallows' Cp".
    pub criteria: Vec<String>,
    /// The candidates compared, best first by the reported criterion.
    pub candidates: Vec<CandidateModel>,
    /// Partial F tests between nested candidates.
    pub nested_tests: Vec<NestedTest>,
    /// Cross-validation folds (k), when CV was run.
    #[serde(default)]
    pub cv_folds: Option<usize>,
    /// Seeds of the CV fold assignments, one per repeat.
    #[serde(default)]
    pub cv_seeds: Vec<u64>,
    /// Notes from the search (e.g. which criteria agree).
    #[serde(default)]
    pub notes: Vec<String>,
}

/// One district's row of an allocation scenario.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AllocationRow {
    /// The region key.
    pub key: String,
    /// This year's budget, when known.
    #[serde(default)]
    pub current_budget: Option<f64>,
    /// The share under each basis, in the order of [`AllocationView::bases`].
    pub shares: Vec<f64>,
    /// The proposed amount (rounded so that amounts sum to the total).
    pub amount: f64,
    /// Lower end of the simulated share range under the chosen basis.
    #[serde(default)]
    pub share_low: Option<f64>,
    /// Upper end of the simulated share range under the chosen basis.
    #[serde(default)]
    pub share_high: Option<f64>,
}

/// An allocation scenario as the brief shows it; the caller fills it from the allocation
/// document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AllocationView {
    /// The budget amount allocated.
    pub total: f64,
    /// The currency or unit of the amounts, e.g. "marks".
    pub currency: String,
    /// The bases compared, e.g. "population", "observed incidents".
    pub bases: Vec<String>,
    /// The basis of the proposed amounts, in words (including blend weights).
    pub chosen_basis: String,
    /// The floor per district, when set.
    #[serde(default)]
    pub floor: Option<f64>,
    /// The cap per district, when set.
    #[serde(default)]
    pub cap: Option<f64>,
    /// The seed of the coefficient simulation behind the share ranges.
    #[serde(default)]
    pub seed: Option<u64>,
    /// Number of simulated coefficient draws.
    #[serde(default)]
    pub draws: Option<usize>,
    /// One row per district.
    pub rows: Vec<AllocationRow>,
    /// Notes (feasibility, rounding, sensitivity), in plain words.
    #[serde(default)]
    pub notes: Vec<String>,
}

/// A what-if scenario the analyst kept for the brief; the caller fills it from the scenario
/// document. Every number is on the response's scale and is copied, never recomputed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioView {
    /// What differs, in words (e.g. "LK-20 with unemployment 9.5 instead of 3.6").
    pub description: String,
    /// What the prediction is for, in words (e.g. "a district with these values", "the average
    /// over 62 districts").
    pub predicts: String,
    /// The predicted value.
    pub predicted: f64,
    /// Lower end of the confidence interval of the mean.
    pub mean_low: f64,
    /// Upper end of the confidence interval of the mean.
    pub mean_high: f64,
    /// Lower end of the prediction interval of a single area (one-area scenarios only).
    #[serde(default)]
    pub new_low: Option<f64>,
    /// Upper end of the prediction interval of a single area (one-area scenarios only).
    #[serde(default)]
    pub new_high: Option<f64>,
    /// Whether the scenario lies beyond the data (its leverage exceeds the largest in the data).
    #[serde(default)]
    pub beyond_data: bool,
    /// The extrapolation flag in words; empty when the scenario lies within the data.
    #[serde(default)]
    pub extrapolation: String,
}

impl ScenarioView {
    /// The numbers a reader could take for a rate: the prediction and every interval end.
    pub fn values(&self) -> Vec<f64> {
        let mut v = vec![self.predicted, self.mean_low, self.mean_high];
        v.extend(self.new_low);
        v.extend(self.new_high);
        v
    }
}

/// Everything the brief is built from. The CLI and the web Brief page both fill this.
///
/// There is deliberately no field to leave out the limitations section.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BriefInput {
    /// The decision question, as the analyst entered it.
    pub question: String,
    /// Who prepared the analysis.
    pub author: String,
    /// The date of the brief (ISO `YYYY-MM-DD`), passed in by the caller.
    pub date: String,
    /// The wardcast version that produced it.
    pub wardcast_version: String,
    /// The fit document of the reported model.
    pub fit: FitDocument,
    /// The checks document of the reported model.
    #[serde(default)]
    pub checks: Option<ChecksDocument>,
    /// How the model was chosen, when a search was run.
    #[serde(default)]
    pub model_choice: Option<ModelChoice>,
    /// The allocation scenario, when one was run.
    #[serde(default)]
    pub allocation: Option<AllocationView>,
    /// What-if scenarios the analyst kept for the brief, oldest first.
    #[serde(default)]
    pub scenarios: Vec<ScenarioView>,
    /// Metadata of the table's columns (labels, units, sources, vintages).
    #[serde(default)]
    pub columns: Vec<ColumnMeta>,
    /// The join that built the analysis table, if any.
    #[serde(default)]
    pub join: Option<JoinReport>,
    /// Checksums of the dataset versions read.
    #[serde(default)]
    pub checksums: Vec<DatasetChecksum>,
    /// Notes on data quality (from the import reports and the analyst).
    #[serde(default)]
    pub data_notes: Vec<String>,
    /// Per-district predictions with prediction intervals. When empty, the brief computes
    /// them from the fit document (unweighted models only).
    #[serde(default)]
    pub district_predictions: Vec<PredictionDoc>,
    /// Whether the outcome counts come from enforcement activity (recorded incidents, arrests).
    /// The feedback-loop caution is always present; this sharpens its wording.
    #[serde(default = "yes")]
    pub counts_from_enforcement: bool,
}

fn yes() -> bool {
    true
}

/// The sections of the brief, in their fixed order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum SectionKind {
    /// Title, question, author, date and version.
    Title,
    /// The summary in plain words.
    Summary,
    /// Sources, rows, join and exclusions.
    Data,
    /// Response, predictors and how the model was chosen.
    Model,
    /// Coefficients, sentences and fit statistics.
    Results,
    /// Diagnostic verdicts, plots and influential districts.
    Checks,
    /// Observed against expected per district.
    Districts,
    /// Allocation scenarios (a one-line note when none was run).
    Allocation,
    /// Limitations and cautions (always present).
    Limitations,
    /// The reviewer sign-off block.
    SignOff,
    /// The reproducibility appendix.
    Reproducibility,
}

impl SectionKind {
    /// A stable id for anchors and the table export.
    pub fn id(self) -> &'static str {
        match self {
            SectionKind::Title => "title",
            SectionKind::Summary => "summary",
            SectionKind::Data => "data",
            SectionKind::Model => "model",
            SectionKind::Results => "results",
            SectionKind::Checks => "checks",
            SectionKind::Districts => "districts",
            SectionKind::Allocation => "allocation",
            SectionKind::Limitations => "limitations",
            SectionKind::SignOff => "sign-off",
            SectionKind::Reproducibility => "reproducibility",
        }
    }
}

/// A table cell: text, or a number with the text shown for it.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    /// Text.
    Text(String),
    /// A number; `shown` is how the brief prints it, `value` what the exports write.
    Number {
        /// The full-precision value.
        value: f64,
        /// The printed form.
        shown: String,
    },
    /// Nothing (a value that does not apply).
    Empty,
}

impl Cell {
    /// A text cell.
    pub fn text(s: impl Into<String>) -> Self {
        Cell::Text(s.into())
    }

    /// A number printed with [`text::fmt_coef`]; a non-finite value becomes text.
    pub fn coef(x: f64) -> Self {
        Self::number(x, text::fmt_coef(x))
    }

    /// A number with a given printed form; a non-finite value becomes text.
    pub fn number(value: f64, shown: String) -> Self {
        if value.is_finite() { Cell::Number { value, shown } } else { Cell::Text("not defined".to_owned()) }
    }

    /// The printed form.
    pub fn shown(&self) -> &str {
        match self {
            Cell::Text(s) => s,
            Cell::Number { shown, .. } => shown,
            Cell::Empty => "",
        }
    }
}

/// A table of the brief.
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    /// A stable name, used as the sheet name and the `table` column of the CSV export.
    pub name: String,
    /// The caption.
    pub caption: String,
    /// Column headers.
    pub columns: Vec<String>,
    /// Rows of cells, each as long as `columns`.
    pub rows: Vec<Vec<Cell>>,
}

/// A chart of the brief: an SVG string with its text alternative.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// The caption shown under the chart.
    pub caption: String,
    /// The SVG document.
    pub svg: String,
}

/// One block of content.
#[derive(Debug, Clone, PartialEq)]
pub enum Block {
    /// A paragraph of plain text.
    Paragraph(String),
    /// A sub-heading inside a section.
    Subheading(String),
    /// A bulleted list.
    List(Vec<String>),
    /// A table.
    Table(Table),
    /// A chart.
    Figure(Figure),
    /// Pre-formatted text (the spec JSON).
    Code(String),
    /// The reviewer's sign-off fields.
    SignOff(Vec<String>),
}

/// A section: its kind, heading and blocks.
#[derive(Debug, Clone, PartialEq)]
pub struct Section {
    kind: SectionKind,
    heading: String,
    blocks: Vec<Block>,
}

impl Section {
    /// The kind.
    pub fn kind(&self) -> SectionKind {
        self.kind
    }
    /// The heading.
    pub fn heading(&self) -> &str {
        &self.heading
    }
    /// The blocks.
    pub fn blocks(&self) -> &[Block] {
        &self.blocks
    }
}

/// One caution of the limitations section, written for this analysis.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CautionText {
    /// A short heading.
    pub heading: String,
    /// The text.
    pub text: String,
}

/// The limitations section's content. It can only be built non-empty.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Limitations {
    items: Vec<CautionText>,
}

impl Limitations {
    /// The headings every brief must carry, in order.
    pub const REQUIRED: [&'static str; 8] = [
        "Association, not causation",
        "Areas, not individuals (the ecological fallacy)",
        "The boundaries shape the results (the modifiable areal unit problem)",
        "Small populations give unstable rates",
        "Counts from enforcement activity can feed back on themselves",
        "Do not extrapolate",
        "How much weight this model can bear",
        "Decisions rest with people, not with this model",
    ];

    /// Builds the section, refusing an empty list, an empty caution or a missing required one.
    ///
    /// # Errors
    /// [`ReportError::Brief`] when any caution is empty or a required heading is missing.
    pub fn new(items: Vec<CautionText>) -> Result<Self> {
        if items.is_empty() {
            return Err(ReportError::brief("the limitations and cautions section is empty"));
        }
        for item in &items {
            if item.heading.trim().is_empty() || item.text.trim().is_empty() {
                return Err(ReportError::brief(format!(
                    "the caution {:?} in the limitations section has no text",
                    item.heading
                )));
            }
        }
        for required in Self::REQUIRED {
            if !items.iter().any(|i| i.heading == required) {
                return Err(ReportError::brief(format!(
                    "the limitations section lacks the caution {required:?}"
                )));
            }
        }
        Ok(Self { items })
    }

    /// The cautions, in order.
    pub fn items(&self) -> &[CautionText] {
        &self.items
    }
}

/// The built brief: a title block and the sections in order.
#[derive(Debug, Clone, PartialEq)]
pub struct Brief {
    title: String,
    sections: Vec<Section>,
    limitations: Limitations,
}

/// The heading of the limitations section.
pub const LIMITATIONS_HEADING: &str = "9. Limitations and cautions";

impl Brief {
    /// Builds the brief from the analysis.
    ///
    /// # Errors
    /// [`ReportError::Brief`] when a required input is empty (question, author, date,
    /// version), when the limitations cannot be written, or a chart cannot be drawn.
    pub fn build(input: &BriefInput) -> Result<Self> {
        build::build(input)
    }

    /// The document title.
    pub fn title(&self) -> &str {
        &self.title
    }

    /// The sections, in order.
    pub fn sections(&self) -> &[Section] {
        &self.sections
    }

    /// The cautions of the limitations section.
    pub fn limitations(&self) -> &Limitations {
        &self.limitations
    }

    /// Every table of the brief, in order of appearance.
    pub fn tables(&self) -> Vec<&Table> {
        self.sections
            .iter()
            .flat_map(|s| s.blocks.iter())
            .filter_map(|b| match b {
                Block::Table(t) => Some(t),
                _ => None,
            })
            .collect()
    }

    /// Checks the brief still carries its limitations section, non-empty and in its place.
    /// Every renderer calls this first and refuses to write a brief without it.
    ///
    /// # Errors
    /// [`ReportError::Brief`] when the section is missing or empty.
    pub fn verify(&self) -> Result<()> {
        let section = self
            .sections
            .iter()
            .find(|s| s.kind == SectionKind::Limitations)
            .ok_or_else(|| ReportError::brief("the limitations and cautions section is missing"))?;
        let listed: Vec<&str> = section
            .blocks
            .iter()
            .filter_map(|b| match b {
                Block::Subheading(h) => Some(h.as_str()),
                _ => None,
            })
            .collect();
        if section.blocks.is_empty() || listed.len() < Limitations::REQUIRED.len() {
            return Err(ReportError::brief("the limitations and cautions section is empty"));
        }
        Limitations::new(self.limitations.items.clone()).map(|_| ())
    }

    /// Removes a section. Only for tests of the renderers' refusal: a brief without its
    /// limitations cannot be rendered.
    #[doc(hidden)]
    pub fn without_section_for_test(mut self, kind: SectionKind) -> Self {
        self.sections.retain(|s| s.kind != kind);
        self
    }
}

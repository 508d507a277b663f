//! The model spec as JSON, and its conversion into the engine spec.
//!
//! A spec is structured data: the response, a list of predictors (each a column with an
//! optional transform and, for text columns, a reference level), an intercept switch,
//! optional case weights and exclusions with reasons. There is no formula language.

use serde::{Deserialize, Serialize};
use wardcast_engine as engine;

use crate::{ContractError, Result, SCHEMA_VERSION};

fn schema() -> String {
    SCHEMA_VERSION.to_owned()
}
fn yes() -> bool {
    true
}
fn level95() -> f64 {
    0.95
}

/// A transform of a predictor or of the response, applied inside the model.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum TransformSpec {
    /// Natural logarithm; needs positive values.
    Log,
    /// `1/x`; needs non-zero values.
    Reciprocal,
    /// Square root; needs non-negative values.
    Sqrt,
    /// `x²`.
    Square,
    /// `x^λ`, with `λ = 0` read as the logarithm.
    Power {
        /// The exponent.
        lambda: f64,
    },
}

impl TransformSpec {
    /// Parses the command-line form: `log`, `reciprocal`, `sqrt`, `square` or `power:λ`.
    pub fn parse(text: &str) -> Result<Self> {
        let bad = |reason: &str| ContractError::InvalidField {
            field: "transform".into(),
            reason: format!("{text:?}: {reason}"),
        };
        match text.trim() {
            "log" => Ok(Self::Log),
            "reciprocal" => Ok(Self::Reciprocal),
            "sqrt" => Ok(Self::Sqrt),
            "square" => Ok(Self::Square),
            other => match other.strip_prefix("power:") {
                Some(l) => {
                    let lambda: f64 = l.trim().parse().map_err(|_| bad("the power is not a number"))?;
                    if !lambda.is_finite() {
                        return Err(bad("the power must be finite"));
                    }
                    Ok(Self::Power { lambda })
                }
                None => Err(bad("use log, reciprocal, sqrt, square or power:<number>")),
            },
        }
    }

    /// The engine's transform.
    pub fn to_engine(self) -> engine::Transform {
        match self {
            Self::Log => engine::Transform::Log,
            Self::Reciprocal => engine::Transform::Reciprocal,
            Self::Sqrt => engine::Transform::Sqrt,
            Self::Square => engine::Transform::Square,
            Self::Power { lambda } => engine::Transform::Power(lambda),
        }
    }

    /// Maps an engine transform back to its JSON form.
    pub fn from_engine(t: &engine::Transform) -> Self {
        match *t {
            engine::Transform::Log => Self::Log,
            engine::Transform::Reciprocal => Self::Reciprocal,
            engine::Transform::Sqrt => Self::Sqrt,
            engine::Transform::Square => Self::Square,
            engine::Transform::Power(lambda) => Self::Power { lambda },
        }
    }
}

/// One predictor: a column, with an optional transform and reference level.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(from = "PredictorEntry")]
pub struct PredictorSpec {
    /// The column name in the analysis table.
    pub column: String,
    /// A transform applied inside the model; the data are not changed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub transform: Option<TransformSpec>,
    /// For a text (categorical) column: the level other levels are compared with.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub reference_level: Option<String>,
}

/// Accepts a bare column name or the full object.
#[derive(Deserialize)]
#[serde(untagged)]
enum PredictorEntry {
    Name(String),
    Full {
        column: String,
        #[serde(default)]
        transform: Option<TransformSpec>,
        #[serde(default)]
        reference_level: Option<String>,
    },
}

impl From<PredictorEntry> for PredictorSpec {
    fn from(e: PredictorEntry) -> Self {
        match e {
            PredictorEntry::Name(column) => Self { column, transform: None, reference_level: None },
            PredictorEntry::Full { column, transform, reference_level } => {
                Self { column, transform, reference_level }
            }
        }
    }
}

/// A row left out of the model on purpose, with the analyst's reason. It stays in the table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ExclusionSpec {
    /// The region key of the row.
    pub key: String,
    /// Why it is left out; required and shown in every report.
    pub reason: String,
}

/// The model spec document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelSpec {
    /// The schema version; defaults to the current one when absent.
    #[serde(default = "schema")]
    pub schema_version: String,
    /// The outcome column, e.g. a rate per 10,000 residents.
    pub response: String,
    /// A transform of the response, e.g. a log.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub response_transform: Option<TransformSpec>,
    /// The indicators, in order.
    pub predictors: Vec<PredictorSpec>,
    /// Whether the model has an intercept (default true).
    #[serde(default = "yes")]
    pub intercept: bool,
    /// A column of positive case weights for weighted least squares.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub weights: Option<String>,
    /// Rows left out, each with a reason.
    #[serde(default)]
    pub exclusions: Vec<ExclusionSpec>,
    /// The confidence level for intervals (default 0.95).
    #[serde(default = "level95")]
    pub level: f64,
}

impl ModelSpec {
    /// A spec with an intercept, no weights, no exclusions and 95% intervals.
    pub fn new(response: impl Into<String>, predictors: impl IntoIterator<Item = impl Into<String>>) -> Self {
        Self {
            schema_version: schema(),
            response: response.into(),
            response_transform: None,
            predictors: predictors
                .into_iter()
                .map(|c| PredictorSpec { column: c.into(), transform: None, reference_level: None })
                .collect(),
            intercept: true,
            weights: None,
            exclusions: Vec::new(),
            level: 0.95,
        }
    }

    /// The same spec with `columns` as its predictors, in that order; a column the spec already
    /// uses keeps its transform and reference level, a new one has neither.
    pub fn with_predictor_columns(&self, columns: &[String]) -> Self {
        let mut spec = self.clone();
        spec.predictors = columns
            .iter()
            .map(|c| {
                self.predictors.iter().find(|p| &p.column == c).cloned().unwrap_or(PredictorSpec {
                    column: c.clone(),
                    transform: None,
                    reference_level: None,
                })
            })
            .collect();
        spec
    }

    /// Checks the fields this crate can check (schema, level, transforms, exclusion reasons).
    pub fn validate(&self) -> Result<()> {
        if self.schema_version != SCHEMA_VERSION {
            return Err(ContractError::SchemaVersion {
                found: self.schema_version.clone(),
                expected: SCHEMA_VERSION.to_owned(),
            });
        }
        if !(self.level > 0.0 && self.level < 1.0) {
            return Err(ContractError::InvalidField {
                field: "level".into(),
                reason: format!("the confidence level must lie strictly between 0 and 1, got {}", self.level),
            });
        }
        let transforms = self.predictors.iter().filter_map(|p| p.transform).chain(self.response_transform);
        for t in transforms {
            if let TransformSpec::Power { lambda } = t
                && !lambda.is_finite()
            {
                return Err(ContractError::InvalidField {
                    field: "transform".into(),
                    reason: "the power must be a finite number".into(),
                });
            }
        }
        for e in &self.exclusions {
            if e.reason.trim().is_empty() {
                return Err(ContractError::InvalidField {
                    field: "exclusions".into(),
                    reason: format!("the exclusion of {:?} needs a reason", e.key),
                });
            }
        }
        Ok(())
    }

    /// Validates and converts into the engine's spec.
    pub fn to_engine(&self) -> Result<engine::ModelSpec> {
        self.validate()?;
        Ok(engine::ModelSpec {
            response: self.response.clone(),
            response_transform: self.response_transform.map(TransformSpec::to_engine),
            predictors: self
                .predictors
                .iter()
                .map(|p| engine::Predictor {
                    column: p.column.clone(),
                    transform: p.transform.map(TransformSpec::to_engine),
                    reference_level: p.reference_level.clone(),
                })
                .collect(),
            intercept: self.intercept,
            weights: self.weights.clone(),
            exclusions: self
                .exclusions
                .iter()
                .map(|e| engine::Exclusion { key: e.key.clone(), reason: e.reason.clone() })
                .collect(),
        })
    }
}

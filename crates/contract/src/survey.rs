//! The survey document: what each column of an analysis' table holds, and how the chosen
//! columns move together (Pearson correlations on pairwise-complete rows).
//!
//! Numbers come from `wardcast_engine::areas` (summaries with quartiles by Hyndman & Fan 1996,
//! definition 7; correlations on the rows where both columns are present). Values that may be
//! undefined (a standard deviation of one value, a correlation without spread) use [`Number`].

use serde::{Deserialize, Serialize};
use wardcast_engine::areas::{PairwiseCorrelation, Summary};

use crate::numbers::Number;

/// Level counts of a text column, most frequent first.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LevelCount {
    /// The level as written in the table.
    pub level: String,
    /// How many rows hold it.
    pub count: usize,
}

/// The five quartile points of a numeric column.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Quartiles {
    /// The smallest value.
    pub min: f64,
    /// The lower quartile.
    pub q1: f64,
    /// The median.
    pub median: f64,
    /// The upper quartile.
    pub q3: f64,
    /// The largest value.
    pub max: f64,
}

/// What one column holds.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ColumnSurvey {
    /// The column name in the table.
    pub name: String,
    /// The readable label (the name when the metadata gives none).
    pub label: String,
    /// The unit, when known.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unit: Option<String>,
    /// The column's role from the metadata (`key`, `count`, `population`, `rate`, `indicator`,
    /// `group`), when known.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub role: Option<String>,
    /// `numeric` or `text`.
    pub kind: String,
    /// Cells with a value (finite, for numeric columns).
    pub n: usize,
    /// Cells without one.
    pub missing: usize,
    /// The mean (numeric columns; null otherwise or without values).
    pub mean: Number,
    /// The sample standard deviation (divisor n − 1; null with fewer than two values).
    pub sd: Number,
    /// Minimum, quartiles and maximum (numeric columns with values).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub quartiles: Option<Quartiles>,
    /// How many distinct levels a text column has.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub distinct: Option<usize>,
    /// Level counts of a text column, most frequent first (ties in level order).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub levels: Vec<LevelCount>,
}

impl ColumnSurvey {
    /// The survey of a numeric column from its engine summary.
    pub fn numeric(name: &str, label: &str, unit: Option<&str>, role: Option<&str>, s: &Summary) -> Self {
        ColumnSurvey {
            name: name.to_owned(),
            label: label.to_owned(),
            unit: unit.map(str::to_owned),
            role: role.map(str::to_owned),
            kind: "numeric".to_owned(),
            n: s.n,
            missing: s.missing,
            mean: Number::from_opt(s.mean),
            sd: Number::from_opt(s.sd),
            quartiles: s.quartiles.map(|[min, q1, median, q3, max]| Quartiles { min, q1, median, q3, max }),
            distinct: None,
            levels: Vec::new(),
        }
    }

    /// The survey of a text column: counts of each level, most frequent first.
    pub fn text(
        name: &str,
        label: &str,
        unit: Option<&str>,
        role: Option<&str>,
        values: &[Option<String>],
    ) -> Self {
        let mut counts = std::collections::BTreeMap::<&str, usize>::new();
        for v in values.iter().flatten() {
            *counts.entry(v.as_str()).or_default() += 1;
        }
        let mut levels: Vec<LevelCount> =
            counts.into_iter().map(|(level, count)| LevelCount { level: level.to_owned(), count }).collect();
        levels.sort_by(|a, b| b.count.cmp(&a.count).then_with(|| a.level.cmp(&b.level)));
        let n = values.iter().flatten().count();
        ColumnSurvey {
            name: name.to_owned(),
            label: label.to_owned(),
            unit: unit.map(str::to_owned),
            role: role.map(str::to_owned),
            kind: "text".to_owned(),
            n,
            missing: values.len() - n,
            mean: Number::Undefined,
            sd: Number::Undefined,
            quartiles: None,
            distinct: Some(levels.len()),
            levels,
        }
    }
}

/// Pearson correlations of the chosen columns on pairwise-complete rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CorrelationDoc {
    /// Always `pearson_pairwise_complete`.
    pub method: String,
    /// The columns, in matrix order.
    pub columns: Vec<String>,
    /// `r[i][j]`; null where undefined (fewer than three shared rows, or no spread).
    pub r: Vec<Vec<Number>>,
    /// `rows[i][j]`: the rows both columns have, i.e. the rows behind `r[i][j]`.
    pub rows: Vec<Vec<usize>>,
    /// Whether every pair uses the same number of rows.
    pub same_rows: bool,
}

impl CorrelationDoc {
    /// The document of an engine result for the named columns.
    pub fn new(columns: Vec<String>, pc: &PairwiseCorrelation) -> Self {
        let first = pc.rows.first().and_then(|r| r.first()).copied();
        let same_rows = pc.rows.iter().flatten().all(|&m| Some(m) == first);
        CorrelationDoc {
            method: "pearson_pairwise_complete".to_owned(),
            columns,
            r: pc.r.iter().map(|row| row.iter().map(|v| Number::from_opt(*v)).collect()).collect(),
            rows: pc.rows.clone(),
            same_rows,
        }
    }
}

/// The survey of an analysis' table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SurveyDocument {
    /// Schema version.
    pub schema_version: String,
    /// Always `survey`.
    pub kind: String,
    /// The analysis id.
    pub analysis: String,
    /// Rows in the table (areas), including any the model leaves out.
    pub rows: usize,
    /// The key column's name, when the metadata names it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub key: Option<String>,
    /// Every column of the table (the key excluded), in table order.
    pub columns: Vec<ColumnSurvey>,
    /// The numeric columns chosen for the scatter-plot matrix and the correlations.
    pub chosen: Vec<String>,
    /// The correlations of the chosen columns.
    pub correlation: CorrelationDoc,
}

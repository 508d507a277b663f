//! The shared model flags of every analysis command, and their conversion to a spec and data.

use std::path::PathBuf;

use wardcast_contract::spec::{ExclusionSpec, ModelSpec, PredictorSpec, TransformSpec};

/// The model flags shared by `fit`, `check`, `select` and `brief`.
#[derive(Debug, Clone, clap::Args)]
pub struct ModelArgs {
    /// A CSV or XLSX table of areas (one row per district, county or tract).
    #[arg(long, conflicts_with = "demo", requires = "key")]
    pub data: Option<PathBuf>,
    /// The region key column of --data.
    #[arg(long)]
    pub key: Option<String>,
    /// Use the bundled, invented Larkmoor table (its rate per 10,000 residents derived).
    #[arg(long)]
    pub demo: bool,
    /// The response column, e.g. assault_rate_per_10k.
    #[arg(long)]
    pub response: Option<String>,
    /// Predictor columns, comma-separated.
    #[arg(long, value_delimiter = ',')]
    pub predictors: Vec<String>,
    /// A column of positive case weights (weighted least squares), e.g. residents.
    #[arg(long)]
    pub weights: Option<String>,
    /// Fit without an intercept.
    #[arg(long)]
    pub no_intercept: bool,
    /// Confidence level for intervals.
    #[arg(long, default_value_t = 0.95)]
    pub level: f64,
    /// A transform inside the model: COL=log|reciprocal|sqrt|square|power:λ (repeatable).
    #[arg(long = "transform", value_name = "COL=KIND")]
    pub transforms: Vec<String>,
    /// For a text predictor, the reference level: COL=LEVEL (repeatable).
    #[arg(long = "reference", value_name = "COL=LEVEL")]
    pub references: Vec<String>,
    /// Leave a row out, with a reason: KEY=reason (repeatable).
    #[arg(long = "exclude", value_name = "KEY=REASON")]
    pub exclusions: Vec<String>,
    /// A whole model spec in the JSON contract's format (replaces the model flags).
    #[arg(long)]
    pub spec: Option<PathBuf>,
}

fn split_pair<'a>(text: &'a str, flag: &str) -> Result<(&'a str, &'a str), String> {
    match text.split_once('=') {
        Some((a, b)) if !a.trim().is_empty() && !b.trim().is_empty() => Ok((a.trim(), b.trim())),
        _ => Err(format!("--{flag} expects NAME=VALUE, got {text:?}")),
    }
}

impl ModelArgs {
    /// Builds the model spec from `--spec` or from the individual flags.
    pub fn spec(&self) -> Result<ModelSpec, String> {
        if let Some(path) = &self.spec {
            let text = std::fs::read_to_string(path)
                .map_err(|e| format!("cannot read the spec file {}: {e}", path.display()))?;
            let spec: ModelSpec = serde_json::from_str(&text)
                .map_err(|e| format!("the spec file {} is not a valid model spec: {e}", path.display()))?;
            spec.validate().map_err(|e| e.to_string())?;
            return Ok(spec);
        }
        let response = self.response.clone().ok_or("name the response with --response (or give --spec)")?;
        if self.predictors.is_empty() {
            return Err("name at least one predictor with --predictors A,B,... (or give --spec)".into());
        }
        let mut spec = ModelSpec::new(response, self.predictors.iter().map(|p| p.trim().to_owned()));
        spec.intercept = !self.no_intercept;
        spec.weights = self.weights.clone();
        spec.level = self.level;
        for t in &self.transforms {
            let (col, kind) = split_pair(t, "transform")?;
            let kind = TransformSpec::parse(kind).map_err(|e| e.to_string())?;
            if col == spec.response {
                spec.response_transform = Some(kind);
            } else {
                let p = find_predictor(&mut spec.predictors, col, "transform")?;
                p.transform = Some(kind);
            }
        }
        for r in &self.references {
            let (col, level) = split_pair(r, "reference")?;
            find_predictor(&mut spec.predictors, col, "reference")?.reference_level = Some(level.to_owned());
        }
        for e in &self.exclusions {
            let (key, reason) = split_pair(e, "exclude")?;
            spec.exclusions.push(ExclusionSpec { key: key.to_owned(), reason: reason.to_owned() });
        }
        spec.validate().map_err(|e| e.to_string())?;
        Ok(spec)
    }

    /// Loads the analysis table named by `--data`/`--key` or `--demo`.
    pub fn table(&self) -> Result<wardcast_engine::Table, String> {
        match (&self.data, self.demo) {
            (Some(path), false) => {
                let key = self.key.as_deref().ok_or("--data needs --key COLUMN")?;
                crate::demo::table_from_file(path, key).map_err(|e| e.to_string())
            }
            (None, true) => crate::demo::larkmoor_table().map_err(|e| e.to_string()),
            _ => Err("give --data FILE --key COLUMN, or --demo for the bundled Larkmoor table".into()),
        }
    }
}

fn find_predictor<'a>(
    ps: &'a mut [PredictorSpec],
    col: &str,
    flag: &str,
) -> Result<&'a mut PredictorSpec, String> {
    ps.iter_mut()
        .find(|p| p.column == col)
        .ok_or_else(|| format!("--{flag} names {col:?}, which is neither the response nor a predictor"))
}

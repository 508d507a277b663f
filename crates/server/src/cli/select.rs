//! `wardcast select`: exact best subsets, cross-validation and nested comparisons of the
//! candidate predictors named by the shared flags; prints the selection document.

use std::process::ExitCode;

use wardcast_contract::selection::{SelectionDocument, SelectionParts};
use wardcast_engine::selection::{
    Candidates, CvOptions, DropOneOptions, GroupColumn, SearchOptions, best_subsets, cross_validate,
    drop_one, partial_f_test, recommend,
};
use wardcast_engine::{ColumnData, Design, QrOptions, Table};

use super::ModelArgs;

/// Flags of `wardcast select`: the shared model flags plus the search and CV settings.
#[derive(Debug, Clone, clap::Args)]
pub struct SelectArgs {
    /// The model flags; the predictors are the candidates.
    #[command(flatten)]
    pub model: ModelArgs,
    /// Candidates every model must contain, comma-separated.
    #[arg(long, value_delimiter = ',')]
    pub force: Vec<String>,
    /// How many models to list per size.
    #[arg(long, default_value_t = 5)]
    pub top: usize,
    /// The largest model size (terms, forced ones included).
    #[arg(long)]
    pub max_size: Option<usize>,
    /// Cross-validation folds (default 10; with --group, at most the number of groups).
    #[arg(long)]
    pub folds: Option<usize>,
    /// Cross-validation repeats, each with fresh folds.
    #[arg(long, default_value_t = 5)]
    pub repeats: usize,
    /// Seed of the fold generator (recorded in the output).
    #[arg(long, default_value_t = 20_240_601)]
    pub seed: u64,
    /// Form folds from whole groups of this column (e.g. a borough), so neighbours stay together.
    #[arg(long)]
    pub group: Option<String>,
}

/// How many of the best models (best per size, smallest first) are cross-validated.
const CV_MODELS: usize = 10;

/// Runs the command; errors are one-line messages.
pub fn run(args: &SelectArgs) -> Result<ExitCode, String> {
    let spec = args.model.spec()?;
    let table = args.model.table()?;
    let engine_spec = spec.to_engine().map_err(|e| e.to_string())?;
    let design = Design::build(&table, &engine_spec).map_err(|e| e.to_string())?;
    let cands = Candidates::from_design(&design).map_err(|e| e.to_string())?;
    let forced = args.force.iter().map(|name| term_index(&spec, name)).collect::<Result<Vec<_>, _>>()?;
    let search = best_subsets(
        &cands,
        &SearchOptions { top: args.top, max_size: args.max_size, forced, ..SearchOptions::default() },
    )
    .map_err(|e| e.to_string())?;

    let groups = match &args.group {
        Some(col) => Some(group_column(&table, &design, col)?),
        None => None,
    };
    let folds = match (&groups, args.folds) {
        (_, Some(k)) => k,
        (Some(g), None) => distinct(&g.values).min(10),
        (None, None) => 10,
    };
    let cv_opts = CvOptions {
        folds,
        repeats: args.repeats,
        seed: args.seed,
        groups,
        response_transform: engine_spec.response_transform,
        ..CvOptions::default()
    };
    let best: Vec<Vec<usize>> = search
        .sizes()
        .iter()
        .filter_map(|s| s.models().first().map(|m| m.terms().to_vec()))
        .take(CV_MODELS)
        .collect();
    let cv = cross_validate(&cands, &best, &cv_opts).map_err(|e| e.to_string())?;
    let recommendation = recommend(&search, Some(&cv));
    let all: Vec<usize> = (0..cands.terms().len()).collect();
    let qr = QrOptions::default();
    let comparisons: Vec<_> = best
        .iter()
        .filter(|m| m.len() < all.len())
        .filter_map(|m| partial_f_test(&cands, m, &all, &qr).ok())
        .collect();
    let drop = drop_one(&cands, &all, &DropOneOptions { qr, cv: Some(cv_opts.clone()) }).ok();
    let doc = SelectionDocument::new(
        &spec,
        &search,
        design.keys(),
        SelectionParts {
            cv: Some(&cv),
            recommendation: Some(&recommendation),
            comparisons: &comparisons,
            drop_one: drop.as_ref(),
        },
    );
    let text = serde_json::to_string_pretty(&doc).map_err(|e| format!("could not write JSON: {e}"))?;
    println!("{text}");
    Ok(ExitCode::SUCCESS)
}

/// The number of distinct values.
fn distinct(values: &[String]) -> usize {
    values.iter().collect::<std::collections::HashSet<_>>().len()
}

/// The candidate index of a predictor named by its column.
fn term_index(spec: &wardcast_contract::spec::ModelSpec, name: &str) -> Result<usize, String> {
    spec.predictors
        .iter()
        .position(|p| p.column == name.trim())
        .ok_or_else(|| format!("--force names {name:?}, which is not among the predictors"))
}

/// The grouping column's values for the rows the design kept.
fn group_column(table: &Table, design: &Design, col: &str) -> Result<GroupColumn, String> {
    let column = table.column(col).ok_or_else(|| format!("--group names {col:?}, which is not a column"))?;
    let text: Vec<Option<String>> = match &column.data {
        ColumnData::Text(v) => v.clone(),
        ColumnData::Numeric(v) => v.iter().map(|x| x.map(|x| x.to_string())).collect(),
    };
    let index: std::collections::HashMap<&str, usize> =
        table.keys().iter().enumerate().map(|(i, k)| (k.as_str(), i)).collect();
    let values = design
        .keys()
        .iter()
        .map(|k| {
            index
                .get(k.as_str())
                .and_then(|&i| text[i].clone())
                .ok_or_else(|| format!("the group column {col:?} is empty for {k:?}"))
        })
        .collect::<Result<Vec<_>, _>>()?;
    Ok(GroupColumn { label: col.to_owned(), values })
}

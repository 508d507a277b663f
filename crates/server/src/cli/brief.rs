//! `wardcast brief`: fit, check and (optionally) choose the model and allocate a budget, then
//! write the budgeting brief as PDF, HTML, or its tables as CSV or XLSX, chosen by the `--out`
//! extension.
//!
//! The model comes from the shared model flags, or from a saved analysis (`--analysis ID` in
//! the store, or `--analysis FILE.json`), whose dataset version is loaded from the store. Either
//! way the command builds the same [`Analysis`] the web app holds and writes the brief through
//! [`crate::web::brief::brief_input`] and [`crate::web::brief::render_brief`], so the command
//! line and the Brief page produce the same document.

use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::Arc;

use wardcast_contract::dataset::SavedAnalysis;
use wardcast_contract::scenario::{SavedScenarios, ScenarioRequest};
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::allocation::BudgetRow;
use wardcast_report::brief::{ChoiceCv, DatasetChecksum, model_choice};
use wardcast_store::Store;

use super::ModelArgs;
use super::allocation::{self, AllocationArgs, AllocationColumns, SavedAllocation};
use crate::web::brief::{BriefFormat, BriefSettings, brief_input, render_brief};
use crate::web::{Analysis, AnalysisParts, Glossary, Source};

/// The demo's decision question, used with `--demo` when none is given.
pub const DEMO_QUESTION: &str = "Which district conditions are associated with higher assault rates, to inform next year's prevention budget?";
/// The demo's author, used with `--demo` when none is given.
pub const DEMO_AUTHOR: &str = "Larkmoor demo";

/// Flags of `wardcast brief`.
#[derive(Debug, Clone, clap::Args)]
pub struct BriefArgs {
    /// The model flags.
    #[command(flatten)]
    pub model: ModelArgs,
    /// A saved analysis: its id in the store, or a path to an exported `.json` file. Replaces
    /// the model flags; its dataset version is read from the store.
    #[arg(
        long,
        value_name = "ID|FILE.json",
        conflicts_with_all = [
            "data", "key", "demo", "response", "predictors", "weights", "no_intercept",
            "transforms", "references", "exclusions", "spec",
        ]
    )]
    pub analysis: Option<String>,
    /// The data folder holding the store (default: a wardcast folder in the user's data
    /// directory); used with --analysis.
    #[arg(long, requires = "analysis")]
    pub data_dir: Option<PathBuf>,
    /// The decision question the brief answers (default with --analysis: the saved one).
    #[arg(long)]
    pub question: Option<String>,
    /// The analyst's name (default with --analysis: the saved one).
    #[arg(long)]
    pub author: Option<String>,
    /// Candidate predictors searched when choosing the model (comma-separated); the model's
    /// own predictors are always among them.
    #[arg(long, value_delimiter = ',')]
    pub candidates: Vec<String>,
    /// Seed of the cross-validation folds (with --analysis: the saved seed).
    #[arg(long)]
    pub seed: Option<u64>,
    /// The allocation flags.
    #[command(flatten)]
    pub allocation: AllocationArgs,
    /// Where to write: brief.pdf, brief.html, tables.xlsx or tables.csv.
    #[arg(long)]
    pub out: PathBuf,
}

/// Everything the brief is made from, before fitting.
struct Plan {
    source: Source,
    spec: ModelSpec,
    key: Option<String>,
    question: Option<String>,
    author: Option<String>,
    cv: ChoiceCv,
    candidates: Vec<String>,
    /// The settings of the what-if scenarios kept for the brief, computed again here.
    kept: Vec<ScenarioRequest>,
    saved_allocation: SavedAllocation,
    demo: bool,
}

/// Runs the command; errors are one-line messages.
pub fn run(args: &BriefArgs) -> Result<ExitCode, String> {
    let format = args
        .out
        .extension()
        .and_then(|e| e.to_str())
        .and_then(BriefFormat::from_extension)
        .ok_or("--out must end in .pdf, .html, .csv or .xlsx")?;
    let plan = match &args.analysis {
        Some(reference) => from_saved(args, reference)?,
        None => from_flags(args)?,
    };
    let question =
        args.question.clone().or(plan.question.clone()).or_else(|| plan.demo.then(|| DEMO_QUESTION.into()));
    let question = question.ok_or("give the decision question with --question")?;
    let author =
        args.author.clone().or(plan.author.clone()).or_else(|| plan.demo.then(|| DEMO_AUTHOR.into()));
    let author = author.ok_or("give the analyst's name with --author")?;

    let columns = plan.source.columns.clone();
    let analysis = Analysis::build(AnalysisParts {
        id: "brief".into(),
        name: plan.source.name.clone(),
        glossary: Glossary::from_meta("districts", &columns).with_steps_from(&plan.source.table),
        source: Arc::new(plan.source),
        spec: plan.spec.clone(),
        parent: None,
    })
    .map_err(|e| e.to_string())?;

    let mut candidates: Vec<String> = plan.spec.predictors.iter().map(|p| p.column.clone()).collect();
    for c in args.candidates.iter().chain(&plan.candidates) {
        if !candidates.contains(c) {
            candidates.push(c.clone());
        }
    }
    let choice = if candidates.len() > plan.spec.predictors.len() {
        Some(model_choice(analysis.table(), &plan.spec, &candidates, &plan.cv).map_err(|e| e.to_string())?)
    } else {
        None
    };

    let request = allocation::request(&args.allocation, &plan.saved_allocation)?;
    let allocation_doc = match &request {
        Some(req) => {
            let cols = AllocationColumns::resolve(
                &args.allocation,
                &columns,
                analysis.table(),
                &plan.spec.response,
            )?;
            let budgets = budgets(args, plan.key.as_deref(), plan.demo, analysis.table())?;
            Some(allocation::run(&analysis, &budgets, &cols, &req.options)?)
        }
        None => None,
    };
    let scenarios = crate::web::whatif::recompute_kept(&analysis, &plan.kept)
        .map_err(|e| format!("a kept scenario cannot be computed again: {e}"))?;
    analysis
        .update_extras(|e| {
            e.model_choice = choice;
            e.allocation = allocation_doc;
            e.question = Some(question);
            e.author = Some(author);
            e.scenarios = scenarios;
        })
        .map_err(|e| e.to_string())?;

    let checks = analysis.checks();
    let settings = BriefSettings { currency: request.and_then(|r| r.currency), ..BriefSettings::today() };
    let input = brief_input(&analysis, &checks.document, &settings).map_err(|e| e.to_string())?;
    let bytes = render_brief(&input, format).map_err(|e| e.to_string())?;
    std::fs::write(&args.out, bytes).map_err(|e| format!("cannot write {}: {e}", args.out.display()))?;
    eprintln!("wrote {}", args.out.display());
    Ok(ExitCode::SUCCESS)
}

/// This year's budgets: `--budgets FILE`, else the demo's budget table with `--demo`, else the
/// analysis table's budget column, else none.
fn budgets(
    args: &BriefArgs,
    key: Option<&str>,
    demo: bool,
    table: &wardcast_engine::Table,
) -> Result<Vec<BudgetRow>, String> {
    if let Some(path) = &args.allocation.budgets {
        let key = key.unwrap_or(crate::demo::KEY);
        let t = crate::demo::table_from_file(path, key).map_err(|e| e.to_string())?;
        return allocation::budgets_from_table(&t);
    }
    if demo {
        let draft = crate::demo::budgets_draft().map_err(|e| e.to_string())?;
        let t = wardcast_store::engine_table(draft.frame(), draft.key()).map_err(|e| e.to_string())?;
        return allocation::budgets_from_table(&t);
    }
    Ok(allocation::budgets_in_table(table).unwrap_or_default())
}

fn from_flags(args: &BriefArgs) -> Result<Plan, String> {
    let spec = args.model.spec()?;
    let demo = args.model.demo;
    let source = if demo {
        crate::web::demo::demo_source().map_err(|e| e.to_string())?
    } else {
        let table = args.model.table()?;
        let name = args
            .model
            .data
            .as_deref()
            .and_then(Path::file_name)
            .and_then(|n| n.to_str())
            .unwrap_or("the analysis table")
            .to_owned();
        Source::bare(name, table)
    };
    let key = if demo { Some(crate::demo::KEY.to_owned()) } else { args.model.key.clone() };
    let cv = ChoiceCv { seed: args.seed.unwrap_or(ChoiceCv::default().seed), ..ChoiceCv::default() };
    Ok(Plan {
        source,
        spec,
        key,
        question: None,
        author: None,
        cv,
        candidates: Vec::new(),
        kept: Vec::new(),
        saved_allocation: SavedAllocation::default(),
        demo,
    })
}

/// Reads the saved analysis (from the store by id, or from a `.json` file) and loads the
/// dataset version it names from the store.
fn from_saved(args: &BriefArgs, reference: &str) -> Result<Plan, String> {
    let dir = args
        .data_dir
        .clone()
        .or_else(Store::default_dir)
        .ok_or("no data folder could be found; give one with --data-dir")?;
    if !dir.is_dir() {
        return Err(format!("the data folder {} does not exist", dir.display()));
    }
    let (store, _) = Store::open(&dir).map_err(|e| e.to_string())?;
    let saved: SavedAnalysis = if reference.to_ascii_lowercase().ends_with(".json") {
        let text = std::fs::read_to_string(reference)
            .map_err(|e| format!("cannot read the saved analysis {reference}: {e}"))?;
        let saved: SavedAnalysis =
            serde_json::from_str(&text).map_err(|e| format!("{reference} is not a saved analysis: {e}"))?;
        saved.check_schema().map_err(|e| e.to_string())?;
        saved
    } else {
        store.analysis(reference).map_err(|e| e.to_string())?.clone()
    };
    let dataset = store.load(&saved.dataset_version).map_err(|e| e.to_string())?;
    let manifest = dataset.manifest().clone();
    let table = dataset.to_engine_table().map_err(|e| e.to_string())?;
    let mut notes: Vec<String> = manifest
        .dropped_rows
        .iter()
        .map(|d| {
            format!(
                "Row {} ({}) was dropped at import: {}.",
                d.row,
                if d.key.is_empty() { "no key" } else { &d.key },
                d.reason
            )
        })
        .collect();
    if let wardcast_contract::dataset::Origin::Join { left, right, join } = &manifest.origin {
        let kind = match join {
            wardcast_contract::dataset::JoinKind::Inner => "inner",
            wardcast_contract::dataset::JoinKind::Left => "left",
        };
        notes.push(format!("The table is the {kind} join of {left} and {right}."));
    }
    let source = Source {
        name: manifest.name.clone(),
        table,
        columns: manifest.columns.iter().map(|c| c.meta.clone()).collect(),
        checksums: vec![DatasetChecksum {
            version_id: manifest.version_id.clone(),
            checksum: manifest.checksum.clone(),
        }],
        join: None,
        notes,
        dataset: Some(manifest.version_id.clone()),
    };
    // One seed feeds every repeat of the engine's cross-validation; a saved list of seeds
    // gives the first seed and the number of repeats (one saved seed keeps the default repeats).
    let default = ChoiceCv::default();
    let cv = ChoiceCv {
        folds: if saved.cv.folds >= 2 { saved.cv.folds as usize } else { default.folds },
        repeats: if saved.cv.seeds.len() > 1 { saved.cv.seeds.len() } else { default.repeats },
        seed: args.seed.or(saved.cv.seeds.first().copied()).unwrap_or(default.seed),
    };
    let scenarios = SavedScenarios::from_value(&saved.scenario)
        .map_err(|e| format!("the saved scenario settings cannot be read: {e}"))?;
    Ok(Plan {
        source,
        spec: saved.model_spec.clone(),
        key: Some(manifest.key.clone()),
        question: Some(saved.question.clone()).filter(|q| !q.trim().is_empty()),
        author: Some(saved.author.clone()).filter(|a| !a.trim().is_empty()),
        cv,
        candidates: scenarios.candidates,
        kept: scenarios.kept,
        saved_allocation: SavedAllocation::from_value(&saved.allocation)?,
        demo: false,
    })
}

//! `wardcast brief`: fit, check and (optionally) choose the model, then write the budgeting
//! brief as PDF, HTML, or its tables as CSV or XLSX, chosen by the `--out` extension.

use std::path::PathBuf;
use std::process::ExitCode;

use wardcast_report::brief::{Brief, BriefInput, ChoiceCv, DatasetChecksum, html, model_choice, pdf, tables};

use super::ModelArgs;
use crate::analysis::{Fitted, today};

/// Flags of `wardcast brief`.
#[derive(Debug, Clone, clap::Args)]
pub struct BriefArgs {
    /// The model flags.
    #[command(flatten)]
    pub model: ModelArgs,
    /// The decision question the brief answers.
    #[arg(long)]
    pub question: Option<String>,
    /// The analyst's name.
    #[arg(long)]
    pub author: Option<String>,
    /// Candidate predictors searched when choosing the model (comma-separated); the model's
    /// own predictors are always among them.
    #[arg(long, value_delimiter = ',')]
    pub candidates: Vec<String>,
    /// Seed of the cross-validation folds.
    #[arg(long, default_value_t = 20_240_601)]
    pub seed: u64,
    /// Where to write: brief.pdf, brief.html, tables.xlsx or tables.csv.
    #[arg(long)]
    pub out: PathBuf,
}

/// Runs the command; errors are one-line messages.
pub fn run(args: &BriefArgs) -> Result<ExitCode, String> {
    let spec = args.model.spec()?;
    let table = args.model.table()?;
    let fitted = Fitted::new(&table, &spec).map_err(|e| e.to_string())?;
    let demo = args.model.demo;
    let question = match (&args.question, demo) {
        (Some(q), _) => q.clone(),
        (None, true) => "Which district conditions are associated with higher assault rates, to inform next year's prevention budget?".into(),
        (None, false) => return Err("give the decision question with --question".into()),
    };
    let author = match (&args.author, demo) {
        (Some(a), _) => a.clone(),
        (None, true) => "Larkmoor demo".into(),
        (None, false) => return Err("give the analyst's name with --author".into()),
    };
    let mut candidates: Vec<String> = spec.predictors.iter().map(|p| p.column.clone()).collect();
    for c in &args.candidates {
        if !candidates.contains(c) {
            candidates.push(c.clone());
        }
    }
    let choice = if candidates.len() > spec.predictors.len() {
        let cv = ChoiceCv { seed: args.seed, ..ChoiceCv::default() };
        Some(model_choice(&table, &spec, &candidates, &cv).map_err(|e| e.to_string())?)
    } else {
        None
    };
    let (columns, checksums) = if demo {
        (
            crate::demo::column_meta(),
            vec![DatasetChecksum {
                version_id: "larkmoor-demo".into(),
                checksum: crate::demo::districts_checksum(),
            }],
        )
    } else {
        (Vec::new(), Vec::new())
    };
    let input = BriefInput {
        question,
        author,
        date: today(),
        wardcast_version: env!("CARGO_PKG_VERSION").into(),
        fit: fitted.fit_document().map_err(|e| e.to_string())?,
        checks: Some(fitted.checks_document()),
        model_choice: choice,
        allocation: None,
        columns,
        join: None,
        checksums,
        data_notes: Vec::new(),
        district_predictions: Vec::new(),
        counts_from_enforcement: true,
    };
    let brief = Brief::build(&input).map_err(|e| e.to_string())?;
    let ext = args.out.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase();
    let bytes = match ext.as_str() {
        "pdf" => pdf::render(&brief, &pdf::PdfOptions::default()).map_err(|e| e.to_string())?,
        "html" | "htm" => html::render(&brief).map_err(|e| e.to_string())?.into_bytes(),
        "csv" => tables::to_csv(&brief).map_err(|e| e.to_string())?.into_bytes(),
        "xlsx" => tables::to_xlsx(&brief).map_err(|e| e.to_string())?,
        _ => return Err("--out must end in .pdf, .html, .csv or .xlsx".into()),
    };
    std::fs::write(&args.out, bytes).map_err(|e| format!("cannot write {}: {e}", args.out.display()))?;
    eprintln!("wrote {}", args.out.display());
    Ok(ExitCode::SUCCESS)
}

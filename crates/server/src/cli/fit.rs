//! `wardcast fit`: fit the model named by the shared flags and print the fit document.

use std::process::ExitCode;

use wardcast_contract::fit::FitDocument;
use wardcast_engine::{Design, Fit, FitOptions};

use super::ModelArgs;

/// Runs the command; errors are one-line messages.
pub fn run(args: &ModelArgs) -> Result<ExitCode, String> {
    let spec = args.spec()?;
    let table = args.table()?;
    let engine_spec = spec.to_engine().map_err(|e| e.to_string())?;
    let design = Design::build(&table, &engine_spec).map_err(|e| e.to_string())?;
    let fit = Fit::new(&design, &FitOptions::default()).map_err(|e| e.to_string())?;
    let doc = FitDocument::from_fit(&fit, &spec).map_err(|e| e.to_string())?;
    let text = serde_json::to_string_pretty(&doc).map_err(|e| format!("could not write JSON: {e}"))?;
    println!("{text}");
    Ok(ExitCode::SUCCESS)
}

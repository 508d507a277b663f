//! `wardcast fit`: fit the model named by the shared flags and print the fit document.

use std::process::ExitCode;

use super::ModelArgs;
use crate::analysis::Fitted;

/// Runs the command; errors are one-line messages.
pub fn run(args: &ModelArgs) -> Result<ExitCode, String> {
    let spec = args.spec()?;
    let table = args.table()?;
    let fitted = Fitted::new(&table, &spec).map_err(|e| e.to_string())?;
    let doc = fitted.fit_document().map_err(|e| e.to_string())?;
    let text = serde_json::to_string_pretty(&doc).map_err(|e| format!("could not write JSON: {e}"))?;
    println!("{text}");
    Ok(ExitCode::SUCCESS)
}

//! The command line: one `clap` definition of every subcommand and the shared model flags.
//!
//! Each analysis command (`fit`, `check`, `select`, `brief`) takes the same [`ModelArgs`],
//! defined once in [`model_args`]. Bad input prints one line on standard error and exits
//! with code 2; success prints JSON on standard output.

pub mod allocation;
pub mod brief;
pub mod check;
pub mod data;
pub mod fit;
pub mod model_args;
pub mod select;

use std::process::ExitCode;

use clap::{Parser, Subcommand};

pub use model_args::ModelArgs;

/// Exit code for refused input.
pub const EXIT_REFUSED: u8 = 2;

/// wardcast: area-level indicator modelling for prevention budgets, on your own machine.
#[derive(Debug, Parser)]
#[command(name = "wardcast", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Serve the web app on this machine (loads the bundled Larkmoor demo).
    Serve(ServeArgs),
    /// Fit a model and print the fit document as JSON.
    Fit(ModelArgs),
    /// Check a model's assumptions, influential areas and collinearity; print the checks document.
    Check(ModelArgs),
    /// Search the best subsets of the predictors, cross-validate them and compare nested models.
    Select(select::SelectArgs),
    /// Write the budgeting brief (PDF or HTML) or its tables (CSV or XLSX).
    Brief(Box<brief::BriefArgs>),
    /// Validate a CSV or XLSX table and show every problem; `--save` stores it.
    Import(data::ImportArgs),
    /// List the stored tables and their versions.
    Tables(data::TablesArgs),
}

/// Flags of `wardcast serve`.
#[derive(Debug, clap::Args)]
pub struct ServeArgs {
    /// The port to listen on.
    #[arg(long, default_value_t = crate::web::DEFAULT_PORT)]
    pub port: u16,
    /// Where datasets and saved analyses are kept (default: a wardcast folder in the user's data directory).
    #[arg(long)]
    pub data_dir: Option<std::path::PathBuf>,
    /// Share on the local network: bind the LAN address and require the printed link's token.
    #[arg(long)]
    pub share: bool,
}

/// Parses the arguments and runs the command.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        // Help and version go out in full; a refused command line is one line and exit code 2,
        // like every other refusal.
        Err(e) if !e.use_stderr() => e.exit(),
        Err(e) => {
            // clap's message runs over several lines before its usage note; join those lines.
            let text = e.to_string();
            let message = text.split("\n\nUsage:").next().unwrap_or_default();
            let message = message.split("\n\nFor more information").next().unwrap_or_default();
            let words: Vec<&str> = message.split_whitespace().collect();
            let line = words.join(" ");
            eprintln!("wardcast: {}", line.trim_start_matches("error: "));
            return ExitCode::from(EXIT_REFUSED);
        }
    };
    let outcome = match cli.command {
        Command::Serve(args) => serve(args),
        Command::Fit(args) => fit::run(&args),
        Command::Check(args) => check::run(&args),
        Command::Select(args) => select::run(&args),
        Command::Brief(args) => brief::run(&args),
        Command::Import(args) => data::run_import(&args),
        Command::Tables(args) => data::run_tables(&args),
    };
    match outcome {
        Ok(code) => code,
        Err(message) => {
            eprintln!("wardcast: {message}");
            ExitCode::from(EXIT_REFUSED)
        }
    }
}

fn serve(args: ServeArgs) -> Result<ExitCode, String> {
    // Open the data folder first: start-up verifies every stored version's checksum, removes
    // stray temp files and quarantines damaged files, and says so before the server starts.
    let dir = args
        .data_dir
        .clone()
        .or_else(wardcast_store::Store::default_dir)
        .ok_or("no data folder could be found; give one with --data-dir")?;
    let (store, report) = wardcast_store::Store::open(&dir).map_err(|e| e.to_string())?;
    for line in &report.log {
        eprintln!("wardcast: {line}");
    }
    eprintln!(
        "wardcast: data folder {} holds {} datasets ({} versions) and {} saved analyses",
        dir.display(),
        report.datasets,
        report.versions,
        report.analyses
    );
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .enable_all()
        .build()
        .map_err(|e| format!("could not start the runtime: {e}"))?;
    let config = crate::web::ServeConfig { port: args.port, data_dir: args.data_dir, share: args.share };
    runtime.block_on(crate::web::serve(config, Some(store))).map_err(|e| e.to_string())?;
    Ok(ExitCode::SUCCESS)
}

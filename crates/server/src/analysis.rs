//! The analysis pipeline shared by the command line and the web app: spec → design → fit →
//! documents. Everything here is blocking numerics; web handlers call it in `spawn_blocking`.

use wardcast_contract::checks::ChecksDocument;
use wardcast_contract::fit::FitDocument;
use wardcast_contract::spec::ModelSpec;
use wardcast_engine::diagnostics::{self, CheckOptions, Checks};
use wardcast_engine::{Design, Fit, FitOptions, Table};

use crate::error::ServerError;

/// A validated, fitted model with the spec it came from.
#[derive(Debug, Clone)]
pub struct Fitted {
    spec: ModelSpec,
    fit: Fit,
}

impl Fitted {
    /// Validates the spec against the table and fits it.
    pub fn new(table: &Table, spec: &ModelSpec) -> Result<Self, ServerError> {
        let engine_spec = spec.to_engine()?;
        let design = Design::build(table, &engine_spec)?;
        let fit = Fit::new(&design, &FitOptions::default())?;
        Ok(Self { spec: spec.clone(), fit })
    }

    /// The spec.
    pub fn spec(&self) -> &ModelSpec {
        &self.spec
    }

    /// The engine fit.
    pub fn fit(&self) -> &Fit {
        &self.fit
    }

    /// The fit document.
    pub fn fit_document(&self) -> Result<FitDocument, ServerError> {
        Ok(FitDocument::from_fit(&self.fit, &self.spec)?)
    }

    /// Runs every diagnostic with the default options.
    pub fn checks(&self) -> Checks {
        diagnostics::run(&self.fit, &CheckOptions::default())
    }

    /// The checks document.
    pub fn checks_document(&self) -> ChecksDocument {
        ChecksDocument::from_checks(&self.checks(), &self.spec)
    }
}

/// Today's date as `YYYY-MM-DD` (UTC), from the system clock.
pub fn today() -> String {
    let secs =
        std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_secs()).unwrap_or(0);
    civil_date(i64::try_from(secs / 86_400).unwrap_or(0))
}

/// The proleptic Gregorian date of a day count since 1970-01-01 (Hinnant's `civil_from_days`).
pub fn civil_date(days: i64) -> String {
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = yoe + era * 400 + i64::from(m <= 2);
    format!("{y:04}-{m:02}-{d:02}")
}

//! The error type of the report crate.

/// Everything that can go wrong while building a chart or a brief.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ReportError {
    /// The data handed to a chart cannot be drawn as given.
    #[error("the {chart} cannot be drawn: {reason}")]
    Chart {
        /// The kind of chart, in plain words (for example "bar chart").
        chart: &'static str,
        /// What is wrong with the data, in plain words.
        reason: String,
    },
    /// The brief cannot be built or written as asked.
    #[error("the brief cannot be produced: {reason}")]
    Brief {
        /// What is missing or wrong, in plain words.
        reason: String,
    },
    /// The engine refused the analysis behind a brief section (its message is for the analyst).
    #[error(transparent)]
    Engine(#[from] wardcast_engine::EngineError),
    /// A contract document could not be converted.
    #[error(transparent)]
    Contract(#[from] wardcast_contract::ContractError),
}

/// The result type of the report crate.
pub type Result<T> = std::result::Result<T, ReportError>;

impl ReportError {
    /// Builds a brief error.
    pub(crate) fn brief(reason: impl Into<String>) -> Self {
        Self::Brief { reason: reason.into() }
    }

    /// Builds a chart error for the named chart kind.
    pub(crate) fn chart(chart: &'static str, reason: impl Into<String>) -> Self {
        Self::Chart { chart, reason: reason.into() }
    }
}

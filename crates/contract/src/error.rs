//! The contract's error type: problems mapping documents to engine inputs.

/// Errors raised while reading or converting contract documents.
#[non_exhaustive]
#[derive(Debug, thiserror::Error)]
pub enum ContractError {
    /// A document declares a schema version this build does not read.
    #[error("this file uses schema {found}, but this version of wardcast reads {expected}")]
    SchemaVersion { found: String, expected: String },
    /// A field holds a value outside its allowed range.
    #[error("{field}: {reason}")]
    InvalidField { field: String, reason: String },
    /// The engine rejected the converted input.
    #[error(transparent)]
    Engine(#[from] wardcast_engine::EngineError),
}

/// Result alias for contract operations.
pub type Result<T> = std::result::Result<T, ContractError>;

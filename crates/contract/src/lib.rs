//! The JSON contract: serde types for model specs and every result document.

//! The regression engine: pure numerics for area-level indicator models (no I/O, no serde).
//!
//! The crate fits ordinary and weighted least squares by Householder QR with column pivoting,
//! computes the usual inference (standard errors, t and F tests, intervals, sums of squares,
//! sequential and partial F tests, information criteria, predictions), and validates model
//! specifications against its own small table type. Every formula is listed with its published
//! source in `docs/METHODS.md`.

pub mod allocation;
pub mod areas;
pub mod data;
pub mod design;
pub mod diagnostics;
pub mod dist;
pub mod error;
pub mod fit;
pub mod linalg;
pub mod matrix;
pub mod selection;
pub mod spec;
pub mod special;

pub use data::{Column, ColumnData, Table};
pub use design::{Design, DroppedRow, PredictorValue, Term, TermKind};
pub use error::{EngineError, Result};
pub use fit::{AnovaRow, Fit, FitOptions, PartialF, Prediction, SsBasis};
pub use linalg::{PivotedQr, QrOptions};
pub use matrix::Matrix;
pub use spec::{Exclusion, ModelSpec, Predictor, Transform};

/// The label of the intercept column in a design.
pub const INTERCEPT_LABEL: &str = "(intercept)";

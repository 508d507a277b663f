//! Model selection and validation: exact best subsets, cross-validation and nested-model
//! comparisons.
//!
//! * [`best_subsets`] finds the best `m` models of every size by SSE, exactly (exhaustive
//!   enumeration or Furnival–Wilson leaps and bounds on a triangular factor), and refits each
//!   reported model by pivoted QR, which supplies SSE, R², adjusted R², Mallows' Cp, AIC, SBC and
//!   PRESS.
//! * [`cross_validate`] estimates out-of-sample error by repeated, seeded k-fold
//!   cross-validation, optionally with grouped folds, on the original response scale.
//! * [`compare`] holds the partial F-test between nested models, the drop-one table and the
//!   recommendation that names each criterion's favourite model.
//!
//! Formulas and sources are listed in docs/METHODS.md.

mod candidates;
pub mod compare;
pub mod cv;
mod fastpath;
mod qrfit;
pub mod subsets;

pub use candidates::{CandidateTerm, Candidates};
pub use compare::{
    Criterion, DropOneOptions, DropOneRow, DropOneTable, PartialFTest, Pick, Recommendation, drop_one,
    partial_f_test, recommend,
};
pub use cv::{
    CvModel, CvOptions, CvResult, FoldAssignment, GroupColumn, Spread, cross_validate, loo_rmse, make_folds,
};
pub use subsets::{
    AliasedModel, CpReference, EXHAUSTIVE_LIMIT, MAX_CANDIDATES, NOTE_AIC_SCALE, NOTE_OPTIMISTIC_P,
    SearchCounts, SearchMethod, SearchOptions, SizeBest, Statistics, SubsetModel, SubsetSearch,
    TIE_TOLERANCE, best_subsets, rank_with_ties,
};

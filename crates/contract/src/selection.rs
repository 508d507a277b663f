//! The selection document: best subsets, cross-validation and nested-model comparisons.

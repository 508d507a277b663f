//! The dataset store: import, validate, join, derive and persist tables (polars).

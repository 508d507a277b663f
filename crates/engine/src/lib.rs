//! The regression engine: pure numerics for area-level indicator models (no I/O, no serde).

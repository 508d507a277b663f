//! Helpers shared by the engine's test modules: fixture loading and tolerance checks.

use std::path::PathBuf;

use serde_json::Value;

/// Reads a fixture under `tests/fixtures/` at the workspace root.
pub fn fixture(rel: &str) -> Value {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../../tests/fixtures").join(rel);
    let text = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("cannot read fixture {}: {e}", path.display()));
    serde_json::from_str(&text)
        .unwrap_or_else(|e| panic!("fixture {} is not valid JSON: {e}", path.display()))
}

/// A JSON number as f64.
pub fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("expected a number, found {v}"))
}

/// A JSON array of numbers.
pub fn nums(v: &Value) -> Vec<f64> {
    v.as_array().unwrap_or_else(|| panic!("expected an array, found {v}")).iter().map(num).collect()
}

/// A JSON array of arrays of numbers.
pub fn rows(v: &Value) -> Vec<Vec<f64>> {
    v.as_array().unwrap_or_else(|| panic!("expected an array, found {v}")).iter().map(nums).collect()
}

/// Asserts `|a − b| ≤ rel·max(|b|, floor)`, naming the quantity.
pub fn assert_close(what: &str, a: f64, b: f64, rel: f64, floor: f64) {
    let tol = rel * b.abs().max(floor);
    assert!(
        a.is_finite() && (a - b).abs() <= tol,
        "{what}: got {a:e}, expected {b:e} (difference {:e}, tolerance {tol:e})",
        (a - b).abs()
    );
}

/// Elementwise [`assert_close`] over two vectors; the floor is `floor_frac` times the largest
/// magnitude in the expected vector, so entries near zero (residuals) are compared on the
/// vector's own scale.
pub fn assert_all_close(what: &str, a: &[f64], b: &[f64], rel: f64, floor_frac: f64) {
    assert_eq!(a.len(), b.len(), "{what}: length");
    let scale = b.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    for (i, (x, y)) in a.iter().zip(b).enumerate() {
        assert_close(&format!("{what}[{i}]"), *x, *y, rel, floor_frac * scale);
    }
}

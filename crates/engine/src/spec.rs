//! The model specification as structured data: response, predictors, transforms, weights,
//! intercept and excluded rows.

use crate::error::{EngineError, Result};

/// A transform applied to a numeric column before fitting.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Transform {
    /// Natural logarithm; defined for positive values.
    Log,
    /// `1/x`; defined for non-zero values.
    Reciprocal,
    /// Square root; defined for values ≥ 0.
    Sqrt,
    /// `x²`; defined everywhere.
    Square,
    /// `x^λ`; `λ = 0` means the natural logarithm. Defined for positive values when `λ ≤ 0` or `λ`
    /// is not an integer, for values ≥ 0 when `λ > 0` is not an integer, and everywhere for a
    /// positive integer `λ`.
    Power(f64),
}

impl Transform {
    /// The transformed value, or `None` outside the transform's domain (or if the result is not a
    /// finite number).
    pub fn apply(&self, x: f64) -> Option<f64> {
        if !x.is_finite() {
            return None;
        }
        let v = match *self {
            Transform::Log => (x > 0.0).then(|| x.ln())?,
            Transform::Reciprocal => (x != 0.0).then(|| 1.0 / x)?,
            Transform::Sqrt => (x >= 0.0).then(|| x.sqrt())?,
            Transform::Square => x * x,
            Transform::Power(l) => {
                if l == 0.0 {
                    (x > 0.0).then(|| x.ln())?
                } else if l.fract() == 0.0 && l > 0.0 {
                    x.powf(l)
                } else if l > 0.0 {
                    (x >= 0.0).then(|| x.powf(l))?
                } else {
                    (x > 0.0).then(|| x.powf(l))?
                }
            }
        };
        v.is_finite().then_some(v)
    }

    /// The label of a transformed column, e.g. `log(vacancy_pct)`.
    pub fn label(&self, col: &str) -> String {
        match *self {
            Transform::Log => format!("log({col})"),
            Transform::Reciprocal => format!("1/{col}"),
            Transform::Sqrt => format!("sqrt({col})"),
            Transform::Square => format!("{col}^2"),
            Transform::Power(0.0) => format!("log({col})"),
            Transform::Power(l) => format!("{col}^{l}"),
        }
    }

    /// Checks the transform's own parameters.
    pub fn validate(&self, column: &str) -> Result<()> {
        if let Transform::Power(l) = *self
            && !l.is_finite()
        {
            return Err(EngineError::BadTransform {
                column: column.to_owned(),
                reason: format!("the power must be a finite number, not {l}"),
            });
        }
        Ok(())
    }
}

/// Labels a column with an optional transform.
pub fn label(column: &str, transform: Option<&Transform>) -> String {
    transform.map_or_else(|| column.to_owned(), |t| t.label(column))
}

/// One predictor of the model. A text column enters as a categorical predictor by treatment
/// coding against `reference_level` (default: the first level in sorted order).
#[derive(Debug, Clone, PartialEq)]
pub struct Predictor {
    /// The column name.
    pub column: String,
    /// An optional transform (numeric columns only).
    pub transform: Option<Transform>,
    /// The reference level of a categorical predictor (text columns only).
    pub reference_level: Option<String>,
}

impl Predictor {
    /// A predictor entered as is.
    pub fn new(column: impl Into<String>) -> Self {
        Self { column: column.into(), transform: None, reference_level: None }
    }

    /// A predictor with a transform.
    pub fn transformed(column: impl Into<String>, transform: Transform) -> Self {
        Self { column: column.into(), transform: Some(transform), reference_level: None }
    }

    /// A categorical predictor with a chosen reference level.
    pub fn categorical(column: impl Into<String>, reference_level: impl Into<String>) -> Self {
        Self { column: column.into(), transform: None, reference_level: Some(reference_level.into()) }
    }

    /// The label of the predictor's term: the column name, with its transform if any.
    pub fn label(&self) -> String {
        label(&self.column, self.transform.as_ref())
    }
}

/// A row the analyst excludes from the fit, with the reason.
#[derive(Debug, Clone, PartialEq)]
pub struct Exclusion {
    /// The row key.
    pub key: String,
    /// Why the row is excluded.
    pub reason: String,
}

/// A model specification.
#[derive(Debug, Clone, PartialEq)]
pub struct ModelSpec {
    /// The response column.
    pub response: String,
    /// An optional transform of the response.
    pub response_transform: Option<Transform>,
    /// The predictors, in the order they enter the model (this order defines the sequential
    /// sums of squares).
    pub predictors: Vec<Predictor>,
    /// Whether the model has an intercept.
    pub intercept: bool,
    /// An optional column of case weights (weighted least squares).
    pub weights: Option<String>,
    /// Rows left out of the fit, with reasons.
    pub exclusions: Vec<Exclusion>,
}

impl ModelSpec {
    /// A spec with an intercept, no weights, no transforms and no exclusions.
    pub fn new(response: impl Into<String>, predictors: &[&str]) -> Self {
        Self {
            response: response.into(),
            response_transform: None,
            predictors: predictors.iter().map(|p| Predictor::new(*p)).collect(),
            intercept: true,
            weights: None,
            exclusions: Vec::new(),
        }
    }

    /// The label of the (possibly transformed) response.
    pub fn response_label(&self) -> String {
        label(&self.response, self.response_transform.as_ref())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn transforms_and_their_domains() {
        assert_eq!(Transform::Log.apply(0.0), None);
        assert_eq!(Transform::Log.apply(1.0), Some(0.0));
        assert_eq!(Transform::Reciprocal.apply(0.0), None);
        assert_eq!(Transform::Reciprocal.apply(4.0), Some(0.25));
        assert_eq!(Transform::Sqrt.apply(-1.0), None);
        assert_eq!(Transform::Square.apply(-3.0), Some(9.0));
        assert_eq!(Transform::Power(0.0).apply(std::f64::consts::E), Some(1.0));
        assert_eq!(Transform::Power(3.0).apply(-2.0), Some(-8.0));
        assert_eq!(Transform::Power(0.5).apply(-2.0), None);
        assert_eq!(Transform::Power(-1.0).apply(0.0), None);
        assert_eq!(Transform::Log.label("vacancy_pct"), "log(vacancy_pct)");
        assert_eq!(Transform::Power(0.5).label("x"), "x^0.5");
        assert!(Transform::Power(f64::NAN).validate("x").is_err());
    }
}

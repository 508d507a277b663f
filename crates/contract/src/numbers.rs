//! Number encoding: how non-finite and undefined values are written in JSON.
//!
//! JSON has no infinity and no NaN. Every field that may hold a non-finite or undefined
//! value uses [`Number`]: a finite value is a plain JSON number, `+∞` is the string
//! `"Infinity"`, `−∞` is `"-Infinity"`, and an undefined value is `null` (the document's
//! `notes` say why it is undefined). Fields that are always finite are plain numbers.

use serde::de::{self, Deserializer, Visitor};
use serde::{Deserialize, Serialize, Serializer};
use std::fmt;

/// A statistic that may be infinite or undefined.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Number {
    /// A finite value.
    Finite(f64),
    /// Positive infinity, e.g. the F statistic of an exact fit.
    PosInfinity,
    /// Negative infinity.
    NegInfinity,
    /// No value is defined, e.g. a t statistic when the standard error is zero.
    Undefined,
}

impl Number {
    /// Maps an `f64`, sending NaN to [`Number::Undefined`].
    pub fn from_f64(x: f64) -> Self {
        if x.is_finite() {
            Number::Finite(x)
        } else if x == f64::INFINITY {
            Number::PosInfinity
        } else if x == f64::NEG_INFINITY {
            Number::NegInfinity
        } else {
            Number::Undefined
        }
    }

    /// Maps an optional `f64`; `None` is undefined.
    pub fn from_opt(x: Option<f64>) -> Self {
        x.map_or(Number::Undefined, Number::from_f64)
    }

    /// The value as an `f64` (infinities kept), or `None` when undefined.
    pub fn as_f64(self) -> Option<f64> {
        match self {
            Number::Finite(x) => Some(x),
            Number::PosInfinity => Some(f64::INFINITY),
            Number::NegInfinity => Some(f64::NEG_INFINITY),
            Number::Undefined => None,
        }
    }
}

impl From<f64> for Number {
    fn from(x: f64) -> Self {
        Number::from_f64(x)
    }
}

impl From<Option<f64>> for Number {
    fn from(x: Option<f64>) -> Self {
        Number::from_opt(x)
    }
}

impl Serialize for Number {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        match *self {
            Number::Finite(x) => s.serialize_f64(x),
            Number::PosInfinity => s.serialize_str("Infinity"),
            Number::NegInfinity => s.serialize_str("-Infinity"),
            Number::Undefined => s.serialize_none(),
        }
    }
}

impl<'de> Deserialize<'de> for Number {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Number;
            fn expecting(&self, f: &mut fmt::Formatter) -> fmt::Result {
                f.write_str("a number, \"Infinity\", \"-Infinity\" or null")
            }
            fn visit_f64<E: de::Error>(self, v: f64) -> Result<Number, E> {
                Ok(Number::from_f64(v))
            }
            fn visit_i64<E: de::Error>(self, v: i64) -> Result<Number, E> {
                Ok(Number::Finite(v as f64))
            }
            fn visit_u64<E: de::Error>(self, v: u64) -> Result<Number, E> {
                Ok(Number::Finite(v as f64))
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Number, E> {
                match v {
                    "Infinity" => Ok(Number::PosInfinity),
                    "-Infinity" => Ok(Number::NegInfinity),
                    other => Err(E::custom(format!("unexpected number text {other:?}"))),
                }
            }
            fn visit_none<E: de::Error>(self) -> Result<Number, E> {
                Ok(Number::Undefined)
            }
            fn visit_unit<E: de::Error>(self) -> Result<Number, E> {
                Ok(Number::Undefined)
            }
        }
        d.deserialize_any(V)
    }
}

/// Maps a slice of optional values.
pub fn numbers(xs: &[Option<f64>]) -> Vec<Number> {
    xs.iter().copied().map(Number::from_opt).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trips_every_kind() {
        let xs = vec![Number::Finite(1.5), Number::PosInfinity, Number::NegInfinity, Number::Undefined];
        let text = serde_json::to_string(&xs).unwrap();
        assert_eq!(text, r#"[1.5,"Infinity","-Infinity",null]"#);
        let back: Vec<Number> = serde_json::from_str(&text).unwrap();
        assert_eq!(back, xs);
    }

    #[test]
    fn nan_is_written_as_null() {
        assert_eq!(serde_json::to_string(&Number::from_f64(f64::NAN)).unwrap(), "null");
    }
}

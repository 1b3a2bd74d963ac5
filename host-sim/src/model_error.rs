//! Why a model could not be built: which parameter, the value given, what it needs.

use std::fmt;

/// A parameter of a plant block or a scenario that is out of range.
#[derive(Clone, Debug, PartialEq)]
pub struct ModelError {
    /// The parameter, as a path into the scenario (`motor.inductance_h`).
    pub field: String,
    /// The value given, as written.
    pub value: String,
    /// What the value must be, completing "must be ...".
    pub needs: String,
}

impl fmt::Display for ModelError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let fix = if self.field.starts_with("--") {
            "change the option"
        } else {
            "change it in the scenario"
        };
        write!(f, "{} = {} must be {}; {fix}", self.field, self.value, self.needs)
    }
}

impl std::error::Error for ModelError {}

impl ModelError {
    /// An error for `field` holding `value`.
    pub fn new(field: impl Into<String>, value: impl fmt::Display, needs: impl Into<String>) -> Self {
        Self {
            field: field.into(),
            value: value.to_string(),
            needs: needs.into(),
        }
    }

    /// An error for `field` holding the number `value`, written compactly.
    pub fn number(field: impl Into<String>, value: f64, needs: impl Into<String>) -> Self {
        Self::new(field, num(value), needs)
    }

    /// `value` must be finite and greater than zero.
    pub fn positive(field: &str, value: f64) -> Result<f64, ModelError> {
        if value.is_finite() && value > 0.0 {
            Ok(value)
        } else {
            Err(Self::number(field, value, "a finite number greater than zero"))
        }
    }

    /// `value` must be finite and zero or more.
    pub fn non_negative(field: &str, value: f64) -> Result<f64, ModelError> {
        if value.is_finite() && value >= 0.0 {
            Ok(value)
        } else {
            Err(Self::number(field, value, "a finite number, zero or more"))
        }
    }

    /// `value` must be finite.
    pub fn finite(field: &str, value: f64) -> Result<f64, ModelError> {
        if value.is_finite() {
            Ok(value)
        } else {
            Err(Self::number(field, value, "a finite number"))
        }
    }

    /// `value` must lie in `[lo, hi]`.
    pub fn within(field: &str, value: f64, lo: f64, hi: f64) -> Result<f64, ModelError> {
        if value.is_finite() && (lo..=hi).contains(&value) {
            Ok(value)
        } else {
            Err(Self::number(
                field,
                value,
                format!("between {} and {}", num(lo), num(hi)),
            ))
        }
    }
}

/// A number as a person writes it: plain between a thousandth and a million,
/// in powers of ten outside (`1e12`, not thirteen digits).
pub fn num(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 || !v.is_finite() || (1e-3..1e6).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

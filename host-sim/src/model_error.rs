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

    /// `value` must be finite and greater than zero.
    pub fn positive(field: &str, value: f64) -> Result<f64, ModelError> {
        if value.is_finite() && value > 0.0 {
            Ok(value)
        } else {
            Err(Self::new(field, value, "a finite number greater than zero"))
        }
    }

    /// `value` must be finite and zero or more.
    pub fn non_negative(field: &str, value: f64) -> Result<f64, ModelError> {
        if value.is_finite() && value >= 0.0 {
            Ok(value)
        } else {
            Err(Self::new(field, value, "a finite number, zero or more"))
        }
    }

    /// `value` must be finite.
    pub fn finite(field: &str, value: f64) -> Result<f64, ModelError> {
        if value.is_finite() {
            Ok(value)
        } else {
            Err(Self::new(field, value, "a finite number"))
        }
    }

    /// `value` must lie in `[lo, hi]`.
    pub fn within(field: &str, value: f64, lo: f64, hi: f64) -> Result<f64, ModelError> {
        if value.is_finite() && (lo..=hi).contains(&value) {
            Ok(value)
        } else {
            Err(Self::new(field, value, format!("between {lo} and {hi}")))
        }
    }
}

//! Typed errors: a refused configuration, a refused command, a refused fault clear.
//!
//! Every constructor in this crate that takes numbers from a person validates them
//! and returns [`ConfigError`] naming the field, the value it got and what it needs.
//! Once a configuration value exists it is known good, so the control path never
//! checks it again. The `Display` text of each error is one sentence meant to be
//! shown to the engineer as it is.

use core::fmt;

use crate::fault::FaultSet;

/// What a configuration value needs to be and was not. New kinds of
/// requirement may be added, so a match on it needs a wildcard arm.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Requirement {
    /// Must be a finite number (not NaN, not infinite).
    Finite,
    /// Must be finite and strictly greater than zero.
    Positive,
    /// Must be finite and zero or greater.
    NonNegative,
    /// Must lie in the closed interval `[min, max]`.
    Within {
        /// Smallest accepted value.
        min: f32,
        /// Largest accepted value.
        max: f32,
    },
    /// Must be strictly greater than the value of the named other field.
    Above(&'static str),
    /// Must be strictly less than the named other quantity.
    Below(&'static str),
    /// Must differ from the value of the named other field.
    DifferentFrom(&'static str),
    /// Must be a whole number of at least 1.
    AtLeastOne,
    /// Must be set, for the stated reason (the value is meaningless).
    Required(&'static str),
}

/// A configuration value was refused. Nothing was changed.
///
/// `field` is the name used in this crate's constructors (for example `"kp"`),
/// `value` the number that was given (converted to `f32`), `needs` what it must be.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ConfigError {
    /// The parameter that was wrong, as named in the constructor.
    pub field: &'static str,
    /// The value that was given.
    pub value: f32,
    /// What the parameter must satisfy.
    pub needs: Requirement,
}

impl ConfigError {
    pub(crate) const fn new(field: &'static str, value: f32, needs: Requirement) -> Self {
        Self { field, value, needs }
    }
}

/// Returns `value` if it is finite and > 0, else the error for `field`.
pub(crate) fn positive(field: &'static str, value: f32) -> Result<f32, ConfigError> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(ConfigError::new(field, value, Requirement::Positive))
    }
}

/// Returns `value` if it is finite and >= 0, else the error for `field`.
pub(crate) fn non_negative(field: &'static str, value: f32) -> Result<f32, ConfigError> {
    if value.is_finite() && value >= 0.0 {
        Ok(value)
    } else {
        Err(ConfigError::new(field, value, Requirement::NonNegative))
    }
}

/// Returns `value` if it is finite, else the error for `field`.
pub(crate) fn finite(field: &'static str, value: f32) -> Result<f32, ConfigError> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(ConfigError::new(field, value, Requirement::Finite))
    }
}

/// Returns `value` if it is finite and not zero (either sign), else the error for `field`.
pub(crate) fn nonzero(field: &'static str, value: f32) -> Result<f32, ConfigError> {
    let value = finite(field, value)?;
    if value == 0.0 {
        return Err(ConfigError::new(field, value, Requirement::DifferentFrom("zero")));
    }
    Ok(value)
}

/// Returns `value` if it is finite and within `[min, max]`, else the error for `field`.
pub(crate) fn within(field: &'static str, value: f32, min: f32, max: f32) -> Result<f32, ConfigError> {
    if value.is_finite() && value >= min && value <= max {
        Ok(value)
    } else {
        Err(ConfigError::new(field, value, Requirement::Within { min, max }))
    }
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let field = self.field;
        let value = self.value;
        match self.needs {
            Requirement::Finite => write!(f, "{field} = {value} is not a finite number; give a real value"),
            Requirement::Positive => {
                write!(
                    f,
                    "{field} = {value} must be a finite number greater than zero; give a positive value"
                )
            }
            Requirement::NonNegative => {
                write!(
                    f,
                    "{field} = {value} must be a finite number of zero or more; give a non-negative value"
                )
            }
            Requirement::Within { min, max } => {
                write!(
                    f,
                    "{field} = {value} is outside the accepted range {min} to {max}; give a value inside it"
                )
            }
            Requirement::Above(other) => {
                write!(
                    f,
                    "{field} = {value} must be greater than {other}; raise {field} or lower {other}"
                )
            }
            Requirement::Below(other) => {
                write!(
                    f,
                    "{field} = {value} must be less than {other}; lower {field} or raise {other}"
                )
            }
            Requirement::DifferentFrom(other) => {
                write!(
                    f,
                    "{field} = {value} must differ from {other}; take the two points further apart"
                )
            }
            Requirement::AtLeastOne => write!(
                f,
                "{field} = {value} must be a whole number of at least 1; give 1 or more"
            ),
            Requirement::Required(reason) => write!(f, "{field} is not set but {reason}; set it"),
        }
    }
}

/// A command from the main loop was refused; the loop kept its previous state.
/// New reasons may be added, so a match on it needs a wildcard arm.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum CommandError {
    /// The requested current setpoint was NaN or infinite; the old setpoint stays.
    SetpointNotFinite(f32),
    /// New gains or settings were refused; the old ones stay.
    Config(ConfigError),
    /// `enable` was asked while faults are latched; clear them first.
    Faulted(FaultSet),
    /// Fault clearing was refused because causes are still present.
    ClearRefused(ClearRefused),
    /// The change is only allowed while the loop is not running; disable it first.
    NotWhileRunning,
    /// An excitation is running; wait for its end or disable the loop.
    Exciting,
}

impl core::error::Error for ConfigError {}

impl From<ConfigError> for CommandError {
    fn from(e: ConfigError) -> Self {
        CommandError::Config(e)
    }
}

impl From<ClearRefused> for CommandError {
    fn from(e: ClearRefused) -> Self {
        CommandError::ClearRefused(e)
    }
}

impl fmt::Display for CommandError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CommandError::SetpointNotFinite(v) => {
                write!(
                    f,
                    "current setpoint {v} A is not a finite number; the previous setpoint is kept"
                )
            }
            CommandError::Config(e) => e.fmt(f),
            CommandError::Faulted(set) => {
                write!(
                    f,
                    "cannot enable while faults are latched ({set}); clear the faults first"
                )
            }
            CommandError::ClearRefused(e) => e.fmt(f),
            CommandError::Exciting => write!(
                f,
                "an excitation is running; wait for it to end or disable the loop first"
            ),
            CommandError::NotWhileRunning => {
                write!(
                    f,
                    "this change is refused while the loop is running; disable the loop first"
                )
            }
        }
    }
}

impl core::error::Error for CommandError {
    fn source(&self) -> Option<&(dyn core::error::Error + 'static)> {
        match self {
            CommandError::Config(e) => Some(e),
            CommandError::ClearRefused(e) => Some(e),
            _ => None,
        }
    }
}

/// Fault clearing was refused: the listed causes are still present.
///
/// The latch stays as it was; remove the causes (let the winding cool, restore the
/// bus, reconnect the sensor) and call clear again.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ClearRefused {
    /// The causes whose condition is still present.
    pub still_present: FaultSet,
}

impl fmt::Display for ClearRefused {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "faults not cleared because {} still present; remove the cause and clear again",
            self.still_present
        )
    }
}

impl core::error::Error for ClearRefused {}

//! The crate's one error type.

use core::fmt;

/// What went wrong when building a configuration or asking a model a question.
///
/// Every variant that concerns an input names the parameter, so a firmware log
/// line says exactly which setting to fix. The type is `Copy` and small, so it
/// can be returned from the validated constructors without cost.
///
/// # Examples
///
/// ```
/// use plateau::{Error, Logistic};
/// let err = Logistic::<f32>::from_midpoint(-1.0, 0.5, 4.0).unwrap_err();
/// assert_eq!(err, Error::NotPositive { parameter: "capacity" });
/// assert_eq!(err.parameter(), Some("capacity"));
/// ```
#[non_exhaustive]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Error {
    /// The parameter is NaN or infinite.
    NotFinite {
        /// Name of the offending parameter.
        parameter: &'static str,
    },
    /// The parameter must be strictly positive.
    NotPositive {
        /// Name of the offending parameter.
        parameter: &'static str,
    },
    /// The parameter is finite and positive where required, but outside the
    /// range the model or setting allows (for example an initial value at or
    /// above the capacity, or a fraction outside (0, 1)).
    OutOfRange {
        /// Name of the offending parameter.
        parameter: &'static str,
    },
    /// Two settings contradict each other (for example an alert fraction at
    /// or below its re-arm fraction).
    Conflict {
        /// The setting being set.
        parameter: &'static str,
        /// The setting it conflicts with.
        other: &'static str,
    },
    /// The curve never reaches the requested level (it lies at or beyond an
    /// asymptote).
    LevelNotReached,
    /// A bounded numerical search ran out of iterations before meeting its
    /// tolerance.
    NoConvergence,
}

impl Error {
    /// The name of the parameter this error is about, if any.
    #[must_use]
    pub const fn parameter(&self) -> Option<&'static str> {
        match self {
            Self::NotFinite { parameter }
            | Self::NotPositive { parameter }
            | Self::OutOfRange { parameter }
            | Self::Conflict { parameter, .. } => Some(parameter),
            Self::LevelNotReached | Self::NoConvergence => None,
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::NotFinite { parameter } => write!(f, "{parameter} must be finite"),
            Self::NotPositive { parameter } => write!(f, "{parameter} must be positive"),
            Self::OutOfRange { parameter } => write!(f, "{parameter} is out of range"),
            Self::Conflict { parameter, other } => {
                write!(f, "{parameter} conflicts with {other}")
            }
            Self::LevelNotReached => f.write_str("the curve never reaches that level"),
            Self::NoConvergence => f.write_str("the numerical search did not converge"),
        }
    }
}

impl core::error::Error for Error {}

/// Checks that `value` is finite.
pub(crate) fn finite<T: crate::Real>(value: T, parameter: &'static str) -> Result<T, Error> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(Error::NotFinite { parameter })
    }
}

/// Checks that `value` is finite and strictly positive.
pub(crate) fn positive<T: crate::Real>(value: T, parameter: &'static str) -> Result<T, Error> {
    let value = finite(value, parameter)?;
    if value > T::ZERO {
        Ok(value)
    } else {
        Err(Error::NotPositive { parameter })
    }
}

/// Checks that `value` is finite and not negative.
pub(crate) fn non_negative<T: crate::Real>(value: T, parameter: &'static str) -> Result<T, Error> {
    let value = finite(value, parameter)?;
    if value >= T::ZERO {
        Ok(value)
    } else {
        Err(Error::OutOfRange { parameter })
    }
}

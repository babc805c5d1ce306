//! The one error type of the parts module; each variant carries the
//! offending value and its message says what is accepted.

use super::tolerance::MAX_TOLERANCE;

/// What went wrong choosing parts.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PartsError {
    /// A series name that is not one of IEC 60063's.
    #[error(
        "unknown preferred-number series {got:?}; expected one of E3, E6, E12, E24, E48, E96, E192"
    )]
    UnknownSeries {
        /// The name given.
        got: String,
    },
    /// A value that cannot be snapped to a series.
    #[error("cannot snap {value} to a preferred value; expected a finite value from {min:e} to {max:e}", min = super::series::MIN_VALUE, max = super::series::MAX_VALUE)]
    BadValue {
        /// The value given.
        value: f64,
    },
    /// A relative tolerance out of range.
    #[error("tolerance {relative}: expected a fraction from 0 to {MAX_TOLERANCE} (0.01 is 1 %)")]
    BadTolerance {
        /// The value given.
        relative: f64,
    },
}

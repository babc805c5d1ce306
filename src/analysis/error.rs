//! The one error type of the analysis module; each variant carries the
//! offending values and its message says what is accepted.

use crate::circuit::CircuitError;

/// What went wrong in a sensitivity, Monte Carlo or signal-level analysis.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum AnalysisError {
    /// The circuit could not be built or solved at the nominal values.
    #[error(transparent)]
    Circuit(#[from] CircuitError),
    /// One Monte Carlo trial could not be solved (the lowest such trial,
    /// whatever the thread count).
    #[error("Monte Carlo trial {trial}: {source}")]
    Trial {
        /// The trial index.
        trial: usize,
        /// Why it failed.
        #[source]
        source: CircuitError,
    },
    /// A sweep grid with a point that is not finite, is negative, or
    /// does not ascend.
    #[error("sweep frequencies must be finite, at least 0 Hz and strictly ascending; point {index} ({freq_hz} Hz) breaks that")]
    Grid {
        /// The offending point.
        index: usize,
        /// Its frequency.
        freq_hz: f64,
    },
    /// A list of frequencies that must not be empty.
    #[error("the {what} list is empty; give at least one frequency")]
    EmptyGrid {
        /// Which list.
        what: &'static str,
    },
    /// A Monte Carlo run of zero trials.
    #[error("a Monte Carlo run needs at least 1 trial, got 0")]
    NoTrials,
    /// A delay limit without bands, with a bad band or a bad bound.
    #[error("delay limit: band {from_hz} Hz to {to_hz} Hz, spread {max_spread_s} s; expected at least one band, each finite with 0 <= from < to, and a positive finite spread")]
    BadDelayLimit {
        /// Start of the first bad band, Hz (NaN when the bands are fine).
        from_hz: f64,
        /// End of that band, Hz.
        to_hz: f64,
        /// The bound, seconds.
        max_spread_s: f64,
    },
    /// A mask without any limit.
    #[error("the mask has no limits; give at least one")]
    EmptyMask,
    /// A mask limit with a bad range or bounds.
    #[error("mask limit {index}: {from_hz} Hz to {to_hz} Hz, {min_db} dB to {max_db} dB; expected finite 0 <= from <= to, bounds not NaN, at least one finite, and min <= max")]
    BadLimit {
        /// Index of the limit in the mask.
        index: usize,
        /// Start of its range, Hz.
        from_hz: f64,
        /// End of its range, Hz.
        to_hz: f64,
        /// Lower bound, dB.
        min_db: f64,
        /// Upper bound, dB.
        max_db: f64,
    },
    /// A mask limit that no analysis frequency falls in, so it would be
    /// silently ignored.
    #[error("mask limit {index} ({from_hz} Hz to {to_hz} Hz) contains none of the analysis frequencies; add a frequency in that range")]
    LimitNotSampled {
        /// Index of the limit in the mask.
        index: usize,
        /// Start of its range, Hz.
        from_hz: f64,
        /// End of its range, Hz.
        to_hz: f64,
    },
    /// A tolerance rule names an element the netlist does not have.
    #[error("tolerance for element {name:?}: the netlist has no element of that name")]
    UnknownElement {
        /// The name given.
        name: String,
    },
    /// A tolerance rule names an element with nothing to vary.
    #[error("tolerance for element {name:?}: a {kind} has nothing to vary; expected a resistor, capacitor, inductor, or single-pole or two-pole op-amp")]
    NotVariable {
        /// The element.
        name: String,
        /// Its kind, in words ("voltage source", "ideal op-amp").
        kind: &'static str,
    },
    /// An op-amp output swing that is not a positive voltage.
    #[error("op-amp output swing {swing_v} V: expected a finite peak voltage > 0")]
    BadSwing {
        /// The value given.
        swing_v: f64,
    },
}

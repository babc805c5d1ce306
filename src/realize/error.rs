//! The one error type of snapping an active build to real parts.
//!
//! Bad input (a tolerance or range out of bounds, a range the build
//! cannot meet) names the design-file key of the `[parts]` table and what
//! would be accepted; the other variants are program faults and say which
//! stage or element they met.

use crate::active::ActiveError;
use crate::analysis::AnalysisError;
use crate::circuit::CircuitError;
use crate::parts::{PartsError, Series, MAX_TOLERANCE};

/// Why an active build could not be snapped to real parts.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PartsSnapError {
    /// A relative tolerance out of range.
    #[error("{key} = {value}: expected a fraction from 0 to {MAX_TOLERANCE} (0.01 is 1 %)")]
    BadTolerance {
        /// The design-file key, e.g. `parts.resistor_tolerance`.
        key: &'static str,
        /// The value given.
        value: f64,
    },
    /// A capacitor range that is not 0 < low <= high, both finite.
    #[error("parts.capacitor_range = [{low_f:e}, {high_f:e}]: expected 0 < low <= high, both finite, in farad")]
    BadRange {
        /// Lower end given, farad.
        low_f: f64,
        /// Upper end given, farad.
        high_f: f64,
    },
    /// The capacitor range holds no value of the capacitor series.
    #[error("parts.capacitor_range = [{low_f:e}, {high_f:e}] holds no {series} value: widen it or choose a finer parts.capacitor_series")]
    NoSeriesValue {
        /// The capacitor series.
        series: Series,
        /// Lower end, farad.
        low_f: f64,
        /// Upper end, farad.
        high_f: f64,
    },
    /// A resistor nocoil chose outside a range the design file sets.
    #[error("{element} = {ohm:e} ohm lies outside parts.resistor_range = [{low_ohm:e}, {high_ohm:e}]: widen the range (the converters' resistors follow their capacitors, which parts.capacitor_range bounds, and the terminations' level)")]
    ResistorOutOfRange {
        /// The resistor.
        element: String,
        /// Its value, ohm.
        ohm: f64,
        /// Lower end of the range, ohm.
        low_ohm: f64,
        /// Upper end of the range, ohm.
        high_ohm: f64,
    },
    /// A capacitor outside a range the design file sets that no
    /// converter's level or image level moves.
    #[error("{stage}: {element} = {farad:e} F lies outside parts.capacitor_range = [{low_f:e}, {high_f:e}], and no converter moves it: {why}")]
    OutOfRange {
        /// The stage it belongs to (or "ladder" for a capacitor of the
        /// passive ladder kept in the build).
        stage: String,
        /// The capacitor.
        element: String,
        /// Its value, farad.
        farad: f64,
        /// Lower end of the range, farad.
        low_f: f64,
        /// Upper end of the range, farad.
        high_f: f64,
        /// Why nothing moves it, and what would help.
        why: &'static str,
    },
    /// A ladder capacitor outside a range the design file sets, at the
    /// design file's impedance level; another level would fit.
    #[error("{element} = {farad:e} F of the ladder lies outside parts.capacitor_range = [{low_f:e}, {high_f:e}] at the terminations' impedance level (source {} ohm, load {} ohm): [terminations] level = \"free\" scales them to source {:.4e} ohm, load {:.4e} ohm{}, which puts every ladder capacitor inside the range; or widen the range", given_ohm[0], given_ohm[1], fitting_ohm[0], fitting_ohm[1], if *beyond_resistor_range { " (beyond the resistor range preferred for terminations)" } else { "" })]
    LevelOutOfRange {
        /// The capacitor.
        element: String,
        /// Its value at the design file's level, farad.
        farad: f64,
        /// Lower end of the range, farad.
        low_f: f64,
        /// Upper end of the range, farad.
        high_f: f64,
        /// The design file's terminations (source, load), ohm.
        given_ohm: [f64; 2],
        /// Terminations that put every ladder capacitor in range, ohm.
        fitting_ohm: [f64; 2],
        /// Whether those lie outside [`crate::parts::PartsChoice::resistor_range_ohm`].
        beyond_resistor_range: bool,
    },
    /// The ladder's capacitors spread wider than a range the design file
    /// sets: the terminations scale them all alike, so no level fits.
    #[error("the ladder's capacitors spread over a ratio of {spread:.4}, wider than parts.capacitor_range = [{low_f:e}, {high_f:e}]: the terminations' impedance level scales them all alike, so no level puts them all inside it; widen the range")]
    NoLevelFits {
        /// Largest over smallest ladder capacitor.
        spread: f64,
        /// Lower end of the range, farad.
        low_f: f64,
        /// Upper end of the range, farad.
        high_f: f64,
    },
    /// The termination capacitors of an FDNR image keep the ratio of the
    /// terminations, and it is wider than the range.
    #[error("the FDNR image's termination capacitors ({}) keep the ratio of the terminations, {ratio:.4}, which no impedance level fits into parts.capacitor_range = [{low_f:e}, {high_f:e}]: widen the range", capacitors.join(", "))]
    TerminationsSpread {
        /// The capacitors, by designator.
        capacitors: Vec<String>,
        /// Largest over smallest of them.
        ratio: f64,
        /// Lower end of the range, farad.
        low_f: f64,
        /// Upper end of the range, farad.
        high_f: f64,
    },
    /// No passband to measure the errors in.
    #[error(
        "no passband given: the snapping errors are measured over at least one [low, high] band"
    )]
    NoPassband,
    /// A passband edge pair that is not 0 < low < high, both finite.
    #[error("passband [{low_hz}, {high_hz}] Hz: need 0 < low < high, both finite")]
    BadPassband {
        /// Lower edge given.
        low_hz: f64,
        /// Upper edge given.
        high_hz: f64,
    },
    /// A value the preferred-number series cannot snap (a program fault:
    /// the active stage builds finite, positive values).
    #[error("{element}: {cause}")]
    Snap {
        /// The element (or key) whose value it was.
        element: String,
        /// Why.
        cause: PartsError,
    },
    /// Measuring a network failed.
    #[error("measuring the passband error: {0}")]
    Active(#[from] ActiveError),
    /// Changing a value of the netlist failed.
    #[error("circuit: {0}")]
    Circuit(#[from] CircuitError),
    /// Analysing the noise or currents for the converter levels failed.
    #[error("choosing the converter levels: {0}")]
    Analysis(#[from] AnalysisError),
}

impl PartsSnapError {
    /// Whether the design file's `[parts]` table asks for what cannot be
    /// bought or built (exit status 2), rather than a program fault.
    pub fn is_bad_input(&self) -> bool {
        matches!(
            self,
            PartsSnapError::BadTolerance { .. }
                | PartsSnapError::BadRange { .. }
                | PartsSnapError::NoSeriesValue { .. }
                | PartsSnapError::OutOfRange { .. }
                | PartsSnapError::ResistorOutOfRange { .. }
                | PartsSnapError::LevelOutOfRange { .. }
                | PartsSnapError::NoLevelFits { .. }
                | PartsSnapError::TerminationsSpread { .. }
        )
    }
}

//! The one error type of the active stage.
//!
//! Every variant carries the offending value or element by name and its
//! message says what would have been accepted.

use super::{Method, NaturalFrequency};
use crate::circuit::{CircuitError, OpAmpModel};

/// Why no active network was built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ActiveError {
    /// A numeric option is out of range.
    #[error("option {option}: must be {accepted}, got {value}")]
    BadOption {
        /// The option's field name in [`super::Options`].
        option: &'static str,
        /// The accepted range, in words.
        accepted: &'static str,
        /// The value given.
        value: f64,
    },
    /// The op-amp model is out of range (checked by the circuit module).
    #[error("op-amp model: {0}")]
    OpAmp(CircuitError),
    /// A passband edge pair that is not 0 < low < high, both finite.
    #[error("passband [{low_hz}, {high_hz}] Hz: need 0 < low < high, both finite")]
    BadPassband {
        /// Lower edge given.
        low_hz: f64,
        /// Upper edge given.
        high_hz: f64,
    },
    /// `optimize` asks for a passband to measure the error in.
    #[error("optimize needs at least one passband in options.passband_hz to measure the error in")]
    NoPassband,
    /// The passive netlist breaks the stage contract (an `AC` source `V`
    /// from node `in` to ground, a load at node `out`, only R, L and C
    /// besides the source).
    #[error("passive netlist: {problem}")]
    Contract {
        /// What is wrong, naming the element or node.
        problem: String,
    },
    /// The method asked for cannot realize this ladder.
    #[error("active.method: the {method} method cannot realize this ladder: it needs {needs}, but {offender}; set active.method to \"gic\" (simulated inductors serve any ladder) or \"auto\"")]
    NotApplicable {
        /// The method asked for.
        method: Method,
        /// What the method needs, in words.
        needs: &'static str,
        /// The element or node that stands in the way.
        offender: String,
    },
    /// A name the active network needs is already used by the passive
    /// netlist.
    #[error("name {name:?} is already used in the passive netlist; the active network needs it for {purpose}")]
    NameClash {
        /// The name.
        name: String,
        /// What it was wanted for.
        purpose: String,
    },
    /// The active network has a natural frequency in the closed right half
    /// plane with the chosen op-amp model.
    #[error("the {method} realization is not stable with {}: its least-damped natural frequency, {:.5e} Hz, has damping ratio {:.3e} (more than {margin:e} is needed); try a faster op-amp, the other method, or `optimize = true`", opamp_words(opamp), root.frequency_hz, root.damping_ratio)]
    Unstable {
        /// The method used.
        method: Method,
        /// The least-damped natural frequency.
        root: NaturalFrequency,
        /// The op-amp model (nominal or a corner of the spread) it was
        /// found with.
        opamp: OpAmpModel,
        /// The relative margin it failed (see [`super::STABILITY_MARGIN`]).
        margin: f64,
    },
    /// A converter cannot be compensated: with these op-amps it realizes
    /// an element of the wrong sign at the balance frequency, so its Z1
    /// would have to be negative (op-amps far too slow for the band).
    #[error("the {method} converter for {replaces} cannot be compensated at {freq_hz:.6e} Hz with {}: its Z1 would come out negative (the op-amps are too slow for this band); give op-amps whose opamp.gbw_hz is 100 times that frequency or more, or `optimize = false`", opamp_words(opamp))]
    TooSlow {
        /// The method used.
        method: Method,
        /// The passive element the converter replaces.
        replaces: String,
        /// The balance frequency, Hz.
        freq_hz: f64,
        /// The op-amp model.
        opamp: OpAmpModel,
    },
    /// The FDNR image's source-side DC-path resistor would come out
    /// negative: the terminations are too far from equal for the image
    /// to hold the ladder's DC gain.
    #[error("terminations.source_ohm: the FDNR image cannot hold the ladder's DC gain with source {source_ohm:e} ohm and load {load_ohm:e} ohm (its source-side DC-path resistor would come out negative); give terminations closer to equal, or set active.method = \"gic\"")]
    DcPath {
        /// The source termination, ohm.
        source_ohm: f64,
        /// The load termination, ohm.
        load_ohm: f64,
    },
    /// Building or solving a circuit failed.
    #[error("circuit: {0}")]
    Circuit(#[from] CircuitError),
}

/// "single-pole op-amps of GBW 7e6 Hz": the model a verdict was found
/// with, in a message.
fn opamp_words(model: &OpAmpModel) -> String {
    match model.gbw_hz() {
        Some(gbw) => format!("{} op-amps of GBW {gbw:e} Hz", model.kind()),
        None => "ideal op-amps".to_string(),
    }
}

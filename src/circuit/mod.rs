//! The netlist type shared by every stage after synthesis, and the
//! nodal-analysis AC solver over it.
//!
//! A [`Netlist`] is plain data: named nodes (index 0 is ground, named
//! `"0"`) and elements between them. It knows nothing of ladders, filters
//! or op-amp circuits built from it.
//!
//! - [`netlist`]: building and validating a netlist.
//! - [`AcSystem`] (in `mna`): the fast solver, built once per netlist and
//!   refilled in place when a value changes.
//! - [`SparseAc`] (in `sparse`; pivot order in `ordering`, elimination
//!   program in `plan`, several points per pass in `lanes`): the sparse
//!   solver for sweeps and Monte Carlo, refilled from an [`AcSystem`].
//! - [`DenseDelay`] (in `delay`): the dense transfer with its exact group
//!   delay, also at an exact transmission zero (the limit there).
//! - [`reference_transfer`] (in `reference`): the slow dense oracle the
//!   fast path is tested against.
//! - [`log_grid`] and the [`Response`] readers (in `response`).
//! - [`AcSystem::natural_frequencies`] (in `poles`): roots of
//!   det(G + sC) for stability checks.

mod delay;
mod error;
mod lanes;
mod layout;
mod lu;
mod mna;
pub mod netlist;
mod ordering;
mod plan;
mod poles;
mod reference;
mod response;
mod sparse;

pub use delay::DenseDelay;
pub use error::CircuitError;
pub use mna::{AcSystem, Adjoint, Target};
pub use netlist::{ElementKind, Terminal};
pub use reference::reference_transfer;
pub use response::{band_grid, log_grid};
pub use sparse::{SparseAc, SparseError, SparseStats};

/// Model of an operational amplifier.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(tag = "model", rename_all = "snake_case")]
pub enum OpAmpModel {
    /// Nullor: zero input difference, any output current.
    Ideal,
    /// A(s) = A0 / (1 + s / wp), wp = 2 pi gbw_hz / A0, with an optional
    /// series output resistance.
    SinglePole {
        /// DC open-loop gain A0 (V/V, not dB).
        dc_gain: f64,
        /// Gain-bandwidth product, Hz.
        gbw_hz: f64,
        /// Output resistance, ohm (0 for none).
        output_ohm: f64,
    },
}

/// V(out)/V(in) at each of `freqs_hz` of a netlist that follows the
/// project's contract (an `AC 1` source drives node `in`, the output is
/// node `out`), by the dense solver.
pub fn response(netlist: &Netlist, freqs_hz: &[f64]) -> Result<Response, CircuitError> {
    let (inp, out) = (netlist.require_node("in")?, netlist.require_node("out")?);
    AcSystem::new(netlist)?.sweep(freqs_hz, out, inp)
}

/// Which op-amp model (`[opamp] model` of a design file).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum OpAmpKind {
    /// [`OpAmpModel::SinglePole`].
    SinglePole,
    /// [`OpAmpModel::Ideal`].
    Ideal,
}

impl std::fmt::Display for OpAmpKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            OpAmpKind::SinglePole => "single-pole",
            OpAmpKind::Ideal => "ideal",
        })
    }
}

impl OpAmpModel {
    /// The model of `kind` with the figures a data sheet gives: the
    /// gain-bandwidth product (Hz), the open-loop DC gain (dB) and the
    /// output resistance (ohm); an ideal op-amp ignores them.
    pub fn from_data_sheet(
        kind: OpAmpKind,
        gbw_hz: f64,
        dc_gain_db: f64,
        output_ohm: f64,
    ) -> OpAmpModel {
        match kind {
            OpAmpKind::Ideal => OpAmpModel::Ideal,
            OpAmpKind::SinglePole => OpAmpModel::SinglePole {
                dc_gain: 10f64.powf(dc_gain_db / 20.0),
                gbw_hz,
                output_ohm,
            },
        }
    }

    /// Which model it is.
    pub fn kind(&self) -> OpAmpKind {
        match self {
            OpAmpModel::Ideal => OpAmpKind::Ideal,
            OpAmpModel::SinglePole { .. } => OpAmpKind::SinglePole,
        }
    }
}

/// One circuit element. Node indices refer to [`Netlist::nodes`].
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "type", rename_all = "snake_case")]
pub enum Element {
    /// Resistor.
    Resistor {
        /// SPICE name (starts with `R`).
        name: String,
        /// One terminal.
        a: usize,
        /// The other terminal.
        b: usize,
        /// Ohm, > 0.
        ohm: f64,
    },
    /// Capacitor.
    Capacitor {
        /// SPICE name (starts with `C`).
        name: String,
        /// One terminal.
        a: usize,
        /// The other terminal.
        b: usize,
        /// Farad, > 0.
        farad: f64,
    },
    /// Inductor.
    Inductor {
        /// SPICE name (starts with `L`).
        name: String,
        /// One terminal.
        a: usize,
        /// The other terminal.
        b: usize,
        /// Henry, > 0.
        henry: f64,
    },
    /// Independent voltage source with an AC magnitude (phase 0).
    VoltageSource {
        /// SPICE name (starts with `V`).
        name: String,
        /// Positive terminal.
        pos: usize,
        /// Negative terminal.
        neg: usize,
        /// AC magnitude, volt.
        ac_volt: f64,
    },
    /// Operational amplifier with its output referred to ground.
    OpAmp {
        /// SPICE instance name (starts with `X`).
        name: String,
        /// Non-inverting input.
        plus: usize,
        /// Inverting input.
        minus: usize,
        /// Output.
        out: usize,
        /// Its model.
        model: OpAmpModel,
    },
}

/// A circuit: named nodes and elements.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Netlist {
    /// A one-line title (the first line of a SPICE deck).
    pub title: String,
    /// Node names; `nodes[0]` is ground and is named `"0"`.
    pub nodes: Vec<String>,
    /// The elements.
    pub elements: Vec<Element>,
}

/// A frequency response: complex transfer at each frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct Response {
    /// Frequencies, Hz, ascending.
    pub freq_hz: Vec<f64>,
    /// V(out) / V(in) at each frequency.
    pub h: Vec<num_complex::Complex64>,
}

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
//! - [`AcSystem::modes`] (in `modes`): the transfer as poles and
//!   residues, for the step response.
//! - [`SparseAc::adjoint_sweep`]: one transposed solve per frequency, the
//!   transfer from every noise source to the output.

mod delay;
mod error;
mod lanes;
mod layout;
mod lu;
mod mna;
mod modes;
pub mod netlist;
mod ordering;
mod plan;
mod poles;
mod reference;
mod response;
mod sparse;

pub use delay::{DenseDelay, RESONANCE_STEP};
pub use error::CircuitError;
pub use mna::{AcSystem, Adjoint, Target};
pub use modes::{Modes, MODES_CHECK};
pub use netlist::{ElementKind, Terminal};
pub use reference::reference_transfer;
pub use response::{band_grid, log_grid};
pub use sparse::{SparseAc, SparseError, SparseStats};

use std::f64::consts::TAU;

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
    /// A(s) = A0 / ((1 + s/w1)(1 + s/w2)), w1 = 2 pi gbw_hz / A0 (the
    /// dominant pole), w2 = 2 pi second_pole_hz (the next one, which sets
    /// the phase margin), with an optional series output resistance.
    TwoPole {
        /// DC open-loop gain A0 (V/V, not dB).
        dc_gain: f64,
        /// Gain-bandwidth product of the dominant pole, Hz.
        gbw_hz: f64,
        /// The second pole, Hz.
        second_pole_hz: f64,
        /// Output resistance, ohm (0 for none).
        output_ohm: f64,
    },
}

/// Boltzmann's constant, J/K (exact in the SI since 2019).
pub const BOLTZMANN_J_PER_K: f64 = 1.380649e-23;

/// The noise of an op-amp as a data sheet gives it: an input voltage
/// noise density and an input current noise density (the same at either
/// input, uncorrelated), each white above its 1/f corner, with power
/// density e_w^2 (1 + f_c / f) (common practice). Zero densities make a
/// noiseless op-amp; a zero corner, white noise down to DC.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct OpAmpNoise {
    /// Input voltage noise density above the corner, V/sqrt(Hz), >= 0.
    pub en_v_per_rthz: f64,
    /// Its 1/f corner, Hz, >= 0.
    pub en_corner_hz: f64,
    /// Input current noise density above the corner, A/sqrt(Hz), >= 0.
    pub in_a_per_rthz: f64,
    /// Its 1/f corner, Hz, >= 0.
    pub in_corner_hz: f64,
}

impl OpAmpNoise {
    /// No noise at all.
    pub const NOISELESS: OpAmpNoise = OpAmpNoise {
        en_v_per_rthz: 0.0,
        en_corner_hz: 0.0,
        in_a_per_rthz: 0.0,
        in_corner_hz: 0.0,
    };

    /// The input voltage noise power density at `freq_hz` (> 0), V^2/Hz.
    pub fn en2_at(&self, freq_hz: f64) -> f64 {
        self.en_v_per_rthz.powi(2) * (1.0 + self.en_corner_hz / freq_hz)
    }

    /// The input current noise power density at `freq_hz` (> 0), A^2/Hz.
    pub fn in2_at(&self, freq_hz: f64) -> f64 {
        self.in_a_per_rthz.powi(2) * (1.0 + self.in_corner_hz / freq_hz)
    }
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
    /// [`OpAmpModel::TwoPole`].
    TwoPole,
    /// [`OpAmpModel::Ideal`].
    Ideal,
}

impl std::fmt::Display for OpAmpKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            OpAmpKind::SinglePole => "single-pole",
            OpAmpKind::TwoPole => "two-pole",
            OpAmpKind::Ideal => "ideal",
        })
    }
}

impl OpAmpModel {
    /// The model of `kind` with the figures a data sheet gives: the
    /// gain-bandwidth product (Hz), the open-loop DC gain (dB), the second
    /// pole (Hz, read by the two-pole model only) and the output
    /// resistance (ohm); an ideal op-amp ignores them all.
    pub fn from_data_sheet(
        kind: OpAmpKind,
        gbw_hz: f64,
        dc_gain_db: f64,
        second_pole_hz: f64,
        output_ohm: f64,
    ) -> OpAmpModel {
        let dc_gain = 10f64.powf(dc_gain_db / 20.0);
        match kind {
            OpAmpKind::Ideal => OpAmpModel::Ideal,
            OpAmpKind::SinglePole => OpAmpModel::SinglePole {
                dc_gain,
                gbw_hz,
                output_ohm,
            },
            OpAmpKind::TwoPole => OpAmpModel::TwoPole {
                dc_gain,
                gbw_hz,
                second_pole_hz,
                output_ohm,
            },
        }
    }

    /// Which model it is.
    pub fn kind(&self) -> OpAmpKind {
        match self {
            OpAmpModel::Ideal => OpAmpKind::Ideal,
            OpAmpModel::SinglePole { .. } => OpAmpKind::SinglePole,
            OpAmpModel::TwoPole { .. } => OpAmpKind::TwoPole,
        }
    }

    /// The gain-bandwidth product, Hz; `None` for the nullor.
    pub fn gbw_hz(&self) -> Option<f64> {
        match *self {
            OpAmpModel::Ideal => None,
            OpAmpModel::SinglePole { gbw_hz, .. } | OpAmpModel::TwoPole { gbw_hz, .. } => {
                Some(gbw_hz)
            }
        }
    }

    /// The output resistance, ohm (0 for none, and for the nullor).
    pub fn output_ohm(&self) -> f64 {
        match *self {
            OpAmpModel::Ideal => 0.0,
            OpAmpModel::SinglePole { output_ohm, .. } | OpAmpModel::TwoPole { output_ohm, .. } => {
                output_ohm
            }
        }
    }

    /// The same model with its output resistance replaced (the nullor
    /// has none).
    pub fn with_output_ohm(&self, ohm: f64) -> OpAmpModel {
        let mut changed = *self;
        match &mut changed {
            OpAmpModel::Ideal => {}
            OpAmpModel::SinglePole { output_ohm, .. } | OpAmpModel::TwoPole { output_ohm, .. } => {
                *output_ohm = ohm
            }
        }
        changed
    }

    /// The same op-amp made faster or slower: its gain-bandwidth set to
    /// `gbw_hz` and a second pole moved by the same factor, so that both
    /// poles scale alike, A(s) becomes A(s/k) and the phase margin stays.
    /// This is what a spread of the GBW stands for here: the compensation
    /// that sets the phase margin is part of the op-amp's design, while
    /// what varies from part to part is the speed of the transistors
    /// behind both poles (common practice: a data sheet quotes one typical
    /// phase margin beside a GBW that varies by tens of percent). The
    /// nullor is returned unchanged.
    pub fn with_gbw(&self, gbw_hz: f64) -> OpAmpModel {
        match *self {
            OpAmpModel::Ideal => OpAmpModel::Ideal,
            OpAmpModel::SinglePole {
                dc_gain,
                output_ohm,
                ..
            } => OpAmpModel::SinglePole {
                dc_gain,
                gbw_hz,
                output_ohm,
            },
            OpAmpModel::TwoPole {
                dc_gain,
                gbw_hz: old,
                second_pole_hz,
                output_ohm,
            } => OpAmpModel::TwoPole {
                dc_gain,
                gbw_hz,
                second_pole_hz: second_pole_hz * (gbw_hz / old),
                output_ohm,
            },
        }
    }

    /// The phase margin at unity loop gain when the op-amp is a follower,
    /// degrees: 180 + arg A(j wu) at |A(j wu)| = 1. `None` for the nullor
    /// and for a DC gain of 1 or less (no crossover).
    ///
    /// For the two-pole model, x = wu^2 solves |A|^2 = 1, that is
    /// (1 + x/w1^2)(1 + x/w2^2) = A0^2, a quadratic
    /// x^2 / (w1 w2)^2 + x (1/w1^2 + 1/w2^2) - (A0^2 - 1) = 0 whose positive
    /// root is taken in the form without cancellation,
    /// 2c / (b + sqrt(b^2 + 4ac)); then the margin is
    /// 90 deg - atan(wu/w1) + 90 deg - atan(wu/w2), close to
    /// 90 deg - atan(GBW / f2) (common practice) when A0 is large and the
    /// second pole well above the GBW (within 2.5 deg from f2 = 2 GBW up,
    /// `phase_margin_is_read_at_the_unity_gain_crossover`); below that the
    /// crossover falls under the GBW and the margin is larger than the
    /// estimate. A single-pole model is the case w2 = infinity.
    pub fn phase_margin_deg(&self) -> Option<f64> {
        let (dc_gain, w1, w2) = match *self {
            OpAmpModel::Ideal => return None,
            OpAmpModel::SinglePole {
                dc_gain, gbw_hz, ..
            } => (dc_gain, TAU * gbw_hz / dc_gain, f64::INFINITY),
            OpAmpModel::TwoPole {
                dc_gain,
                gbw_hz,
                second_pole_hz,
                ..
            } => (dc_gain, TAU * gbw_hz / dc_gain, TAU * second_pole_hz),
        };
        if dc_gain <= 1.0 {
            return None;
        }
        let a = (w1 * w2).powi(-2);
        let b = w1.powi(-2) + w2.powi(-2);
        let c = (dc_gain - 1.0) * (dc_gain + 1.0);
        let wu = (2.0 * c / (b + (b * b + 4.0 * a * c).sqrt())).sqrt();
        Some(180.0 - (wu / w1).atan().to_degrees() - (wu / w2).atan().to_degrees())
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

//! Darlington synthesis of doubly terminated LC ladders.
//!
//! Input: a normalized [`crate::approx::Prototype`] and the ratio of the
//! terminations. Output: a normalized [`Ladder`] (source resistance 1 ohm,
//! passband edge 1 rad/s) whose voltage transfer from the source EMF to the
//! load is the prototype's H(s) times the flat factor of the terminations.
//!
//! The stages, one file each: `prototype` ([`synthesize`], the entry from
//! the approximation), `terminations` ([`variant_for`], the
//! flat-loss level), `darlington` (E and F from the roots, polished to
//! double-double consistency), `ends` (extraction from both ends, joined
//! where they meet), `extraction` (zero shifting and the continued
//! fraction, in double-double `poly` arithmetic), `ladder` (node layout
//! and the reference evaluator [`Ladder::transfer`]).
//!
//! Invariants of every [`Ladder`] built here: all element values positive;
//! the parts extracted from the source and from the load agree on the arm
//! where they meet (to a named tolerance), which a ladder with the wrong
//! terminations or roots cannot do; arms alternate series and shunt.

mod darlington;
mod ends;
mod error;
mod extraction;
mod ladder;
mod poly;
mod prototype;
mod terminations;

use crate::approx::{self, Family};

pub use darlington::{synthesize_characteristic, Characteristic};
pub use error::SynthError;
pub use prototype::synthesize;
pub use terminations::variant_for;

/// Highest elliptic order the synthesis is asked for. For ordinary masks
/// ((0.01 dB, 80 dB), (0.1 dB, 70 dB)) ladders up to order 16 hold their
/// response to 2e-4 dB; masks with very narrow transitions fail earlier
/// (order 7 to 11) with a [`SynthError`] rather than a wrong ladder. The
/// limit comes from the double-precision roots of the prototype.
pub const ELLIPTIC_SYNTHESIS_MAX_ORDER: usize = 16;

/// Highest order the synthesis is asked for in `family`: the
/// approximation's own limit ([`approx::MAX_ORDER`]; the all-pole ladders
/// hold it, tests/synth.rs checks them to order 25 against closed forms),
/// or [`ELLIPTIC_SYNTHESIS_MAX_ORDER`] for the families with finite
/// transmission zeros.
pub fn max_order(family: Family) -> usize {
    if family.finite_zeros() {
        ELLIPTIC_SYNTHESIS_MAX_ORDER
    } else {
        approx::MAX_ORDER
    }
}

/// Which of the two dual ladders.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Form {
    /// Shunt capacitor first; the inductors (and elliptic tanks) sit in the
    /// series arms.
    MinInductor,
    /// Series inductor first; the capacitors (and elliptic series
    /// resonators) sit in the shunt arms, all ending at ground.
    MinCapacitor,
}

impl std::fmt::Display for Form {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Form::MinInductor => "minimum-inductor",
            Form::MinCapacitor => "minimum-capacitor",
        })
    }
}

/// A reactive element of a normalized ladder.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Reactance {
    /// Inductance, henry.
    Inductor,
    /// Capacitance, farad.
    Capacitor,
}

/// Whether an element belongs to a series arm or a shunt arm.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Arm {
    /// In the signal path between two ladder nodes.
    Series,
    /// From a ladder node to ground (possibly through an internal node).
    Shunt,
}

impl std::fmt::Display for Arm {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Arm::Series => "series",
            Arm::Shunt => "shunt",
        })
    }
}

/// One L or C of a ladder, between two of its nodes.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Element {
    /// L or C.
    pub kind: Reactance,
    /// Henry or farad (normalized: 1 ohm, 1 rad/s).
    pub value: f64,
    /// Node at one end; 0 is ground.
    pub a: usize,
    /// Node at the other end; 0 is ground.
    pub b: usize,
    /// Series or shunt arm.
    pub arm: Arm,
    /// Index of the arm, counted from the source (0-based).
    pub arm_index: usize,
}

/// A doubly terminated LC ladder.
///
/// Node 0 is ground; node 1 is the input (where the source resistance
/// ends); node `output` carries the load. Shunt series resonators use an
/// internal node of their own.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Ladder {
    /// The dual form.
    pub form: Form,
    /// Source resistance, ohm (1 when normalized).
    pub source_ohm: f64,
    /// Load resistance, ohm.
    pub load_ohm: f64,
    /// Number of nodes, ground included.
    pub nodes: usize,
    /// The output (load) node.
    pub output: usize,
    /// The reactive elements, from source to load.
    pub elements: Vec<Element>,
    /// The flat factor of the terminations: V(load)/V(source EMF) =
    /// `flat_gain` * H(s) for the prototype H the ladder was synthesized
    /// from; `sqrt(K_t) sqrt(r) / 2 = r / ((1 + r) |H(0)|)`.
    pub flat_gain: f64,
}

/// The values of one arm, henry and farad, for [`Ladder::from_arms`].
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ArmValues {
    /// An inductor in a series arm.
    SeriesL(f64),
    /// A capacitor from the node to ground.
    ShuntC(f64),
    /// A parallel LC tank (L, C) in a series arm.
    SeriesTank(f64, f64),
    /// A series LC (L, C) from the node to ground, the inductor on the
    /// ladder side.
    ShuntResonator(f64, f64),
}

impl std::fmt::Display for ArmValues {
    /// The arm in words, values to 6 significant digits (normalized henry
    /// and farad).
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match *self {
            ArmValues::SeriesL(l) => write!(f, "a series L of {l:.6e} H"),
            ArmValues::ShuntC(c) => write!(f, "a shunt C of {c:.6e} F"),
            ArmValues::SeriesTank(l, c) => write!(f, "a series tank of {l:.6e} H and {c:.6e} F"),
            ArmValues::ShuntResonator(l, c) => {
                write!(f, "a shunt resonator of {l:.6e} H and {c:.6e} F")
            }
        }
    }
}

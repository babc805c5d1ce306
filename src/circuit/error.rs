//! The one error type of the circuit module.
//!
//! Every variant carries the offending values (element or node by name
//! where one exists) and its message says what would have been accepted.

use super::OpAmpKind;

/// What went wrong while building, validating or solving a circuit.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum CircuitError {
    /// An element value or op-amp parameter is out of range.
    #[error("element {name:?}: {quantity} must be {accepted}, got {value}")]
    BadValue {
        /// The element.
        name: String,
        /// Which quantity ("ohm", "gbw_hz", ...).
        quantity: &'static str,
        /// The accepted range, in words.
        accepted: &'static str,
        /// The value given.
        value: f64,
    },
    /// An element name has the wrong SPICE prefix letter for its kind.
    #[error("element {name:?}: a {kind} needs a name starting with {expected:?}")]
    BadPrefix {
        /// The element.
        name: String,
        /// Its kind, in words.
        kind: &'static str,
        /// The prefix letter its kind requires (either case is accepted).
        expected: char,
    },
    /// An element name has characters SPICE would misread.
    #[error("element name {name:?}: after the prefix letter use one or more ASCII letters, digits or '_'")]
    BadName {
        /// The name given.
        name: String,
    },
    /// Two elements share a name (SPICE ignores case, so this does too).
    #[error("element name {name:?} is used by elements {first} and {second}; names must be unique ignoring case")]
    DuplicateName {
        /// The shared name (as the second element spells it).
        name: String,
        /// Index of the first element with it.
        first: usize,
        /// Index of the second element with it.
        second: usize,
    },
    /// A node name is empty, has characters SPICE would misread, or is
    /// reserved for ground.
    #[error("node {index} is named {name:?}; use one or more ASCII letters, digits or '_', not \"0\" or \"gnd\" except for ground at index 0")]
    BadNodeName {
        /// The node index.
        index: usize,
        /// The name given.
        name: String,
    },
    /// Node 0 is not named `"0"`, or there is no node at all.
    #[error("node 0 must be ground, named \"0\"; got {got:?}")]
    NoGround {
        /// The name of node 0, or `None` if the node list is empty.
        got: Option<String>,
    },
    /// Two nodes share a name (ignoring case, as SPICE does).
    #[error("node name {name:?} is used by nodes {first} and {second}; names must be unique ignoring case")]
    DuplicateNode {
        /// The shared name (as the second node spells it).
        name: String,
        /// Index of the first node with it.
        first: usize,
        /// Index of the second node with it.
        second: usize,
    },
    /// A node index does not exist.
    #[error("{context}: node index {node} does not exist; the netlist has nodes 0..{node_count}")]
    NodeOutOfRange {
        /// Who referred to it (an element name, or "output"/"input").
        context: String,
        /// The index given.
        node: usize,
        /// The number of nodes.
        node_count: usize,
    },
    /// A two-terminal element has both ends on one node.
    #[error("element {name:?} has both terminals on node {node:?}; connect its ends to two different nodes")]
    Shorted {
        /// The element.
        name: String,
        /// The node.
        node: String,
    },
    /// A node that no element touches.
    #[error("node {node:?} is not connected to any element; remove it or connect at least two terminals")]
    UnusedNode {
        /// The node.
        node: String,
    },
    /// A node touched by one terminal only, which is not an op-amp output
    /// (so nothing fixes its voltage).
    #[error("node {node:?} is touched only by element {element:?}; a node needs two terminals or an op-amp output")]
    DanglingNode {
        /// The node.
        node: String,
        /// The only element touching it.
        element: String,
    },
    /// An element index does not exist.
    #[error("element index {index} does not exist; the netlist has elements 0..{count}")]
    ElementOutOfRange {
        /// The index given.
        index: usize,
        /// The number of elements.
        count: usize,
    },
    /// `set_value` on an element without a single value (an op-amp).
    #[error("element {name:?} has no single value; use set_opamp_model for op-amps")]
    NoScalarValue {
        /// The element.
        name: String,
    },
    /// `set_opamp_model` on an element that is not an op-amp.
    #[error("element {name:?} is not an op-amp")]
    NotAnOpAmp {
        /// The element.
        name: String,
    },
    /// A model change that would add or remove one of the op-amp's
    /// internal unknowns (output resistance zero versus non-zero, a second
    /// pole or none), which needs a new system.
    #[error("op-amp {name:?}: a {old} model with output {old_ohm} ohm cannot become a {new} model with output {new_ohm} ohm in a built system (a change of output resistance between zero and non-zero, or to or from a two-pole model, changes the unknowns); build a new one")]
    OpAmpStructure {
        /// The op-amp.
        name: String,
        /// Its model now.
        old: OpAmpKind,
        /// Its output resistance now, ohm.
        old_ohm: f64,
        /// The model asked for.
        new: OpAmpKind,
        /// The output resistance asked for, ohm.
        new_ohm: f64,
    },
    /// A frequency that is negative or not finite.
    #[error("frequency {freq_hz} Hz: must be finite and >= 0")]
    BadFrequency {
        /// The frequency given.
        freq_hz: f64,
    },
    /// The nodal equations have no unique solution at this frequency (a
    /// floating node, a loop of voltage sources, an LC resonance short).
    #[error("the circuit equations are singular at {freq_hz} Hz (floating node, source loop or a short at resonance)")]
    Singular {
        /// The frequency.
        freq_hz: f64,
    },
    /// A ratio or log-derivative needs a non-zero node voltage.
    #[error("node {node} has zero voltage at {freq_hz} Hz; a transfer ratio or group delay needs it non-zero")]
    ZeroVoltage {
        /// The node index.
        node: usize,
        /// The frequency.
        freq_hz: f64,
    },
    /// A node the caller needs is not in the netlist.
    #[error("the netlist has no node named {name:?}")]
    NoSuchNode {
        /// The name asked for.
        name: String,
    },
    /// An iterative computation did not converge.
    #[error("{what} did not converge")]
    NoConvergence {
        /// What was being computed.
        what: &'static str,
    },
    /// A frequency grid that cannot be built.
    #[error("frequency grid {from_hz} Hz to {to_hz} Hz in {points} points: need 0 < from < to, both finite, and at least 2 points")]
    BadGrid {
        /// Start.
        from_hz: f64,
        /// Stop.
        to_hz: f64,
        /// Number of points.
        points: usize,
    },
    /// A response whose frequencies do not strictly ascend, or with too
    /// few points for a derivative.
    #[error("response frequencies must be finite, strictly ascending and at least 2; point {index} ({freq_hz} Hz) breaks that")]
    BadResponseGrid {
        /// The offending point.
        index: usize,
        /// Its frequency (NaN if the response is too short).
        freq_hz: f64,
    },
}

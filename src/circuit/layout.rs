//! The unknowns of the modified nodal equations and where they live.
//!
//! Shared by the fast solver and the reference solver, so both number the
//! unknowns alike: node `i >= 1` is unknown `i - 1` (ground has none), then
//! each element in netlist order adds what it needs: an inductor or a
//! voltage source its branch current; an op-amp its output current, then,
//! with a non-zero output resistance, the internal node between its
//! controlled source and the resistor, then, for a two-pole model, the
//! output of its first pole (the MNA is linear in s, so a second pole
//! needs an unknown of its own).

use super::{Element, Netlist, OpAmpModel};

/// The extra unknowns of one element.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub(crate) struct Extras {
    /// Branch current (L, V) or output current (op-amp).
    pub current: Option<usize>,
    /// Internal output node of an op-amp with output resistance.
    pub internal: Option<usize>,
    /// Output of the first pole of a two-pole op-amp; its row is the
    /// second pole's law.
    pub pole: Option<usize>,
}

/// Numbering of every unknown.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Layout {
    /// Number of nodes, ground included.
    pub node_count: usize,
    /// Number of unknowns.
    pub size: usize,
    /// Per element, in netlist order.
    pub extras: Vec<Extras>,
}

/// The unknowns an op-amp model adds beside its output current: what a
/// model change must keep for the system to be refilled, not rebuilt.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct OpAmpUnknowns {
    /// A resistor after the controlled source (output_ohm > 0).
    pub internal: bool,
    /// A second pole.
    pub pole: bool,
}

impl OpAmpUnknowns {
    /// The unknowns `model` adds.
    pub fn of(model: &OpAmpModel) -> OpAmpUnknowns {
        OpAmpUnknowns {
            internal: model.output_ohm() > 0.0,
            pole: matches!(model, OpAmpModel::TwoPole { .. }),
        }
    }
}

impl Layout {
    /// Numbers the unknowns of a netlist (assumed valid).
    pub fn new(netlist: &Netlist) -> Layout {
        let node_count = netlist.nodes.len();
        let mut size = node_count.saturating_sub(1);
        let mut next = || {
            size += 1;
            Some(size - 1)
        };
        let extras = netlist
            .elements
            .iter()
            .map(|element| match element {
                Element::Resistor { .. } | Element::Capacitor { .. } => Extras::default(),
                Element::Inductor { .. } | Element::VoltageSource { .. } => Extras {
                    current: next(),
                    ..Extras::default()
                },
                Element::OpAmp { model, .. } => {
                    let adds = OpAmpUnknowns::of(model);
                    Extras {
                        current: next(),
                        internal: if adds.internal { next() } else { None },
                        pole: if adds.pole { next() } else { None },
                    }
                }
            })
            .collect();
        Layout {
            node_count,
            size,
            extras,
        }
    }

    /// The unknown of a node's voltage; `None` for ground.
    pub fn node(&self, node: usize) -> Option<usize> {
        node.checked_sub(1)
    }
}

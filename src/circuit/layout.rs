//! The unknowns of the modified nodal equations and where they live.
//!
//! Shared by the fast solver and the reference solver, so both number the
//! unknowns alike: node `i >= 1` is unknown `i - 1` (ground has none), then
//! each element in netlist order adds what it needs: an inductor or a
//! voltage source its branch current; an op-amp its output current and,
//! with a non-zero output resistance, the internal node between its
//! controlled source and the resistor.

use super::{Element, Netlist, OpAmpModel};

/// The extra unknowns of one element.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub(crate) struct Extras {
    /// Branch current (L, V) or output current (op-amp).
    pub current: Option<usize>,
    /// Internal output node of an op-amp with output resistance.
    pub internal: Option<usize>,
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

/// Whether an op-amp model puts a resistor after its controlled source.
pub(crate) fn has_output_resistor(model: &OpAmpModel) -> bool {
    matches!(model, OpAmpModel::SinglePole { output_ohm, .. } if *output_ohm > 0.0)
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
                    internal: None,
                },
                Element::OpAmp { model, .. } => Extras {
                    current: next(),
                    internal: if has_output_resistor(model) {
                        next()
                    } else {
                        None
                    },
                },
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

//! The DC that the op-amps' input bias currents put on a build: every
//! op-amp input draws the same current into the op-amp (a bipolar input
//! stage's base currents, of one sign; their difference, the offset
//! current, is a fraction of it, common practice), the input source at
//! zero. One DC solve of the network's conductance matrix, capacitors
//! open, each op-amp row at its DC gain; checked against ngspice's
//! operating point of the exported deck with a current source at every
//! op-amp input (tests/level.rs).

use nalgebra::DVector;

use super::AnalysisError;
use crate::circuit::{AcSystem, Element};

/// Where the bias currents put a build's DC.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BiasOffsets {
    /// The current every op-amp input draws, A.
    pub bias_current_a: f64,
    /// The DC at the output node, V.
    pub out_v: f64,
    /// The op-amp whose output sits furthest from 0 V.
    pub largest_designator: String,
    /// Its output's DC, V.
    pub largest_v: f64,
}

/// The DC the bias current `bias_a` into every op-amp input of `system`
/// puts at node `out` and at the op-amp outputs; `None` when the network
/// has no DC solution (a node that only capacitors reach, whose bias
/// current has nowhere to go but to charge them) or no op-amp.
pub fn bias_offsets(
    system: &AcSystem,
    out: usize,
    bias_a: f64,
) -> Result<Option<BiasOffsets>, AnalysisError> {
    let netlist = system.netlist();
    let g = system.g();
    let mut b = DVector::<f64>::zeros(g.nrows());
    let mut outputs = Vec::new();
    for e in &netlist.elements {
        if let Element::OpAmp {
            name,
            plus,
            minus,
            out,
            ..
        } = e
        {
            // Each input's node equation: the current it draws leaves the
            // node (a ground input draws from ground, which holds it).
            for node in [*plus, *minus] {
                if let Some(row) = system.unknown_of_node(node) {
                    b[row] -= bias_a;
                }
            }
            outputs.push((name.clone(), *out));
        }
    }
    let Some(x) = g
        .clone()
        .lu()
        .solve(&b)
        .filter(|x| x.iter().all(|v| v.is_finite()))
    else {
        return Ok(None);
    };
    let at = |node: usize| system.unknown_of_node(node).map_or(0.0, |u| x[u]);
    let largest = outputs
        .into_iter()
        .map(|(name, node)| (name, at(node)))
        .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()));
    Ok(largest.map(|(largest_designator, largest_v)| BiasOffsets {
        bias_current_a: bias_a,
        out_v: at(out),
        largest_designator,
        largest_v,
    }))
}

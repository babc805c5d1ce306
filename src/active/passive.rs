//! Reading the passive ideal: the stage contract, where each reactive
//! element sits, and the series-order swaps that ground as many of the
//! elements a method converts as the topology allows.
//!
//! Contract (the one `transform` writes): the netlist validates; one
//! voltage source, from node `in` to ground; a node `out` carrying the
//! load; besides the source only resistors, capacitors and inductors.
//!
//! Series swap: two elements in series through a node that nothing else
//! touches carry one current, so exchanging their places leaves every
//! other node voltage unchanged. For an L and a C in series from a ladder
//! node to ground this puts the element a method wants grounded (the
//! inductor for simulated inductors, the capacitor for the FDNR image) at
//! the ground end.

use crate::circuit::{Element, ElementKind, Netlist};

use super::error::ActiveError;
use super::Note;

/// A passive netlist that follows the contract.
#[derive(Debug, Clone)]
pub(crate) struct Passive {
    /// The netlist (possibly with series arms swapped).
    pub netlist: Netlist,
    /// Node `in`.
    pub input: usize,
    /// Node `out`.
    pub output: usize,
}

fn contract(problem: String) -> ActiveError {
    ActiveError::Contract { problem }
}

/// The two ends of an R, C or L; `None` for a source or an op-amp.
pub(crate) fn ends(element: &Element) -> Option<(usize, usize)> {
    match *element {
        Element::Resistor { a, b, .. }
        | Element::Capacitor { a, b, .. }
        | Element::Inductor { a, b, .. } => Some((a, b)),
        _ => None,
    }
}

/// Moves a two-terminal element's ends.
fn set_ends(element: &mut Element, (na, nb): (usize, usize)) {
    if let Element::Resistor { a, b, .. }
    | Element::Capacitor { a, b, .. }
    | Element::Inductor { a, b, .. } = element
    {
        (*a, *b) = (na, nb);
    }
}

/// The non-ground end of an element with one end at ground.
pub(crate) fn grounded_at(element: &Element) -> Option<usize> {
    match ends(element)? {
        (0, n) | (n, 0) => Some(n),
        _ => None,
    }
}

impl Passive {
    /// Checks the contract.
    pub fn read(netlist: &Netlist) -> Result<Passive, ActiveError> {
        netlist.validate()?;
        let node = |name: &str| {
            netlist.node_index(name).ok_or_else(|| {
                contract(format!(
                    "no node named {name:?}; the source drives \"in\" and the load sits at \"out\""
                ))
            })
        };
        let (input, output) = (node("in")?, node("out")?);
        let mut sources = 0;
        for element in &netlist.elements {
            match *element {
                Element::VoltageSource { pos, neg, .. } => {
                    sources += 1;
                    if (pos, neg) != (input, 0) {
                        return Err(contract(format!(
                            "source {:?} runs from {:?} to {:?}; it must run from \"in\" to ground",
                            element.name(),
                            netlist.nodes[pos],
                            netlist.nodes[neg]
                        )));
                    }
                }
                Element::OpAmp { .. } => {
                    return Err(contract(format!(
                        "op-amp {:?}: the passive ideal holds only R, L, C and the source",
                        element.name()
                    )))
                }
                _ => {}
            }
        }
        if sources != 1 {
            return Err(contract(format!(
                "{sources} voltage sources; exactly one, from \"in\" to ground, is expected"
            )));
        }
        Ok(Passive {
            netlist: netlist.clone(),
            input,
            output,
        })
    }

    /// The elements touching each node, by index.
    fn touching(&self) -> Vec<Vec<usize>> {
        let mut touching = vec![Vec::new(); self.netlist.nodes.len()];
        for (index, element) in self.netlist.elements.iter().enumerate() {
            for (node, _) in element.terminals() {
                touching[node].push(index);
            }
        }
        touching
    }

    /// Every inductor and capacitor in series through a node that
    /// nothing else touches (nor `in` or `out`), as (that node, the
    /// inductor's index, the capacitor's index).
    pub(crate) fn series_pairs(&self) -> Vec<(usize, usize, usize)> {
        let mut pairs = Vec::new();
        for (m, list) in self.touching().iter().enumerate().skip(1) {
            if m == self.input || m == self.output {
                continue;
            }
            let [i, j] = list[..] else { continue };
            let kind = |k: usize| self.netlist.elements[k].kind();
            match (kind(i), kind(j)) {
                (ElementKind::Inductor, ElementKind::Capacitor) => pairs.push((m, i, j)),
                (ElementKind::Capacitor, ElementKind::Inductor) => pairs.push((m, j, i)),
                _ => {}
            }
        }
        pairs
    }

    /// Swaps every L-C pair in series from a node to ground whose grounded
    /// element is not of kind `grounded`, and returns one note per swap.
    pub fn ground_series_arms(&mut self, grounded: ElementKind) -> Vec<Note> {
        let mut notes = Vec::new();
        for (m, i, j) in self.series_pairs() {
            let to_ground = |k: usize| grounded_at(&self.netlist.elements[k]) == Some(m);
            let (g, x) = match (to_ground(i), to_ground(j)) {
                (true, false) => (i, j),
                (false, true) => (j, i),
                _ => continue,
            };
            if self.netlist.elements[g].kind() == grounded {
                continue;
            }
            let Some((xa, xb)) = ends(&self.netlist.elements[x]) else {
                continue;
            };
            let top = if xa == m { xb } else { xa };
            set_ends(&mut self.netlist.elements[g], (top, m));
            set_ends(&mut self.netlist.elements[x], (m, 0));
            notes.push(Note::SeriesSwap {
                grounded: self.netlist.elements[x].name().to_string(),
                other: self.netlist.elements[g].name().to_string(),
                node: self.netlist.nodes[top].clone(),
            });
        }
        notes
    }
}

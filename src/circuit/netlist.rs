//! Building and checking a [`Netlist`].
//!
//! Invariants that [`Netlist::validate`] establishes (and that the solver
//! and the SPICE export rely on):
//! - node 0 is ground, named `"0"`; every other node name is ASCII letters,
//!   digits or `_`, unique ignoring case (SPICE folds case), and is neither
//!   `"0"` nor `"gnd"` (which ngspice also reads as ground);
//! - element names start with their kind's SPICE letter, continue with
//!   ASCII letters, digits or `_`, and are unique ignoring case;
//! - R, C, L values are finite and > 0; source magnitudes are finite;
//!   op-amp gains and gain-bandwidths finite and > 0, output resistances
//!   finite and >= 0;
//! - every node index exists, no two-terminal element is shorted, and every
//!   non-ground node is touched by two terminals or by an op-amp output.

use super::{CircuitError, Element, Netlist, OpAmpModel};

/// The kind of an [`Element`], for counting and for SPICE prefixes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ElementKind {
    /// [`Element::Resistor`].
    Resistor,
    /// [`Element::Capacitor`].
    Capacitor,
    /// [`Element::Inductor`].
    Inductor,
    /// [`Element::VoltageSource`].
    VoltageSource,
    /// [`Element::OpAmp`].
    OpAmp,
}

impl ElementKind {
    /// The SPICE letter every element name of this kind starts with.
    pub fn prefix(self) -> char {
        match self {
            ElementKind::Resistor => 'R',
            ElementKind::Capacitor => 'C',
            ElementKind::Inductor => 'L',
            ElementKind::VoltageSource => 'V',
            ElementKind::OpAmp => 'X',
        }
    }

    /// The kind in words, for messages.
    pub fn word(self) -> &'static str {
        match self {
            ElementKind::Resistor => "resistor",
            ElementKind::Capacitor => "capacitor",
            ElementKind::Inductor => "inductor",
            ElementKind::VoltageSource => "voltage source",
            ElementKind::OpAmp => "op-amp",
        }
    }
}

/// The role of one terminal of an element.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Terminal {
    /// An end of a two-terminal element (R, C, L, V).
    End,
    /// An op-amp input.
    Input,
    /// An op-amp output: it fixes the node voltage by itself.
    Output,
}

impl Element {
    /// Its kind.
    pub fn kind(&self) -> ElementKind {
        match self {
            Element::Resistor { .. } => ElementKind::Resistor,
            Element::Capacitor { .. } => ElementKind::Capacitor,
            Element::Inductor { .. } => ElementKind::Inductor,
            Element::VoltageSource { .. } => ElementKind::VoltageSource,
            Element::OpAmp { .. } => ElementKind::OpAmp,
        }
    }

    /// Its SPICE name.
    pub fn name(&self) -> &str {
        match self {
            Element::Resistor { name, .. }
            | Element::Capacitor { name, .. }
            | Element::Inductor { name, .. }
            | Element::VoltageSource { name, .. }
            | Element::OpAmp { name, .. } => name,
        }
    }

    /// Its nodes with their roles: (a, b) or (pos, neg) for two-terminal
    /// elements, (plus, minus, out) for op-amps.
    pub fn terminals(&self) -> Vec<(usize, Terminal)> {
        match *self {
            Element::Resistor { a, b, .. }
            | Element::Capacitor { a, b, .. }
            | Element::Inductor { a, b, .. } => vec![(a, Terminal::End), (b, Terminal::End)],
            Element::VoltageSource { pos, neg, .. } => {
                vec![(pos, Terminal::End), (neg, Terminal::End)]
            }
            Element::OpAmp {
                plus, minus, out, ..
            } => vec![
                (plus, Terminal::Input),
                (minus, Terminal::Input),
                (out, Terminal::Output),
            ],
        }
    }

    /// Its single value (ohm, farad, henry, or the source's AC volt), or
    /// `None` for an op-amp.
    pub fn value(&self) -> Option<f64> {
        match *self {
            Element::Resistor { ohm: v, .. }
            | Element::Capacitor { farad: v, .. }
            | Element::Inductor { henry: v, .. }
            | Element::VoltageSource { ac_volt: v, .. } => Some(v),
            Element::OpAmp { .. } => None,
        }
    }

    /// Replaces its single value after checking it (the element is left
    /// unchanged on error); op-amps have none.
    pub fn set_value(&mut self, value: f64) -> Result<(), CircuitError> {
        let kind = self.kind();
        match self {
            Element::Resistor { name, ohm: v, .. }
            | Element::Capacitor { name, farad: v, .. }
            | Element::Inductor { name, henry: v, .. }
            | Element::VoltageSource {
                name, ac_volt: v, ..
            } => {
                check_scalar(kind, name, value)?;
                *v = value;
                Ok(())
            }
            Element::OpAmp { name, .. } => Err(CircuitError::NoScalarValue { name: name.clone() }),
        }
    }

    /// The same element with every node index passed through `map`.
    fn with_nodes(&self, map: &mut impl FnMut(usize) -> usize) -> Element {
        let mut e = self.clone();
        match &mut e {
            Element::Resistor { a, b, .. }
            | Element::Capacitor { a, b, .. }
            | Element::Inductor { a, b, .. } => (*a, *b) = (map(*a), map(*b)),
            Element::VoltageSource { pos, neg, .. } => (*pos, *neg) = (map(*pos), map(*neg)),
            Element::OpAmp {
                plus, minus, out, ..
            } => (*plus, *minus, *out) = (map(*plus), map(*minus), map(*out)),
        }
        e
    }

    /// Checks the name's prefix and characters.
    fn check_name(&self) -> Result<(), CircuitError> {
        let name = self.name();
        let kind = self.kind();
        let mut chars = name.chars();
        let first = chars.next();
        if first.map(|c| c.to_ascii_uppercase()) != Some(kind.prefix()) {
            return Err(CircuitError::BadPrefix {
                name: name.to_string(),
                kind: kind.word(),
                expected: kind.prefix(),
            });
        }
        if !is_identifier(chars.as_str()) {
            return Err(CircuitError::BadName {
                name: name.to_string(),
            });
        }
        Ok(())
    }

    /// Checks values and model parameters against their ranges.
    fn check_values(&self) -> Result<(), CircuitError> {
        match (self, self.value()) {
            (Element::OpAmp { name, model, .. }, _) => check_model(name, model),
            (_, Some(value)) => check_scalar(self.kind(), self.name(), value),
            (_, None) => Ok(()),
        }
    }

    /// Checks node indices and that two-terminal elements are not shorted.
    fn check_nodes(&self, nodes: &[String]) -> Result<(), CircuitError> {
        let terminals = self.terminals();
        for &(node, _) in &terminals {
            if node >= nodes.len() {
                return Err(CircuitError::NodeOutOfRange {
                    context: format!("element {:?}", self.name()),
                    node,
                    node_count: nodes.len(),
                });
            }
        }
        if let [(a, Terminal::End), (b, Terminal::End)] = terminals[..] {
            if a == b {
                return Err(CircuitError::Shorted {
                    name: self.name().to_string(),
                    node: nodes[a].clone(),
                });
            }
        }
        Ok(())
    }
}

/// Checks an op-amp model's parameters.
pub(crate) fn check_model(name: &str, model: &OpAmpModel) -> Result<(), CircuitError> {
    match *model {
        OpAmpModel::Ideal => Ok(()),
        OpAmpModel::SinglePole {
            dc_gain,
            gbw_hz,
            output_ohm,
        }
        | OpAmpModel::TwoPole {
            dc_gain,
            gbw_hz,
            output_ohm,
            ..
        } => {
            positive(name, "dc_gain", dc_gain)?;
            positive(name, "gbw_hz", gbw_hz)?;
            if let OpAmpModel::TwoPole { second_pole_hz, .. } = *model {
                positive(name, "second_pole_hz", second_pole_hz)?;
            }
            if output_ohm.is_finite() && output_ohm >= 0.0 {
                Ok(())
            } else {
                Err(bad_value(name, "output_ohm", "finite and >= 0", output_ohm))
            }
        }
    }
}

/// Checks the single value of an element of this kind.
fn check_scalar(kind: ElementKind, name: &str, value: f64) -> Result<(), CircuitError> {
    match kind {
        ElementKind::Resistor => positive(name, "ohm", value),
        ElementKind::Capacitor => positive(name, "farad", value),
        ElementKind::Inductor => positive(name, "henry", value),
        ElementKind::VoltageSource => finite(name, "ac_volt", value),
        ElementKind::OpAmp => Err(CircuitError::NoScalarValue {
            name: name.to_string(),
        }),
    }
}

fn bad_value(
    name: &str,
    quantity: &'static str,
    accepted: &'static str,
    value: f64,
) -> CircuitError {
    CircuitError::BadValue {
        name: name.to_string(),
        quantity,
        accepted,
        value,
    }
}

fn positive(name: &str, quantity: &'static str, value: f64) -> Result<(), CircuitError> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(bad_value(name, quantity, "finite and > 0", value))
    }
}

fn finite(name: &str, quantity: &'static str, value: f64) -> Result<(), CircuitError> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(bad_value(name, quantity, "finite", value))
    }
}

/// One or more ASCII letters, digits or `_`: safe as a SPICE token.
fn is_identifier(s: &str) -> bool {
    !s.is_empty() && s.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
}

/// A name a non-ground node may carry.
fn is_node_name(s: &str) -> bool {
    is_identifier(s) && s != "0" && !s.eq_ignore_ascii_case("gnd")
}

impl Netlist {
    /// An empty circuit with only the ground node `"0"`.
    pub fn new(title: impl Into<String>) -> Netlist {
        Netlist {
            title: title.into(),
            nodes: vec!["0".to_string()],
            elements: Vec::new(),
        }
    }

    /// The index of the node with this name (ignoring case, as SPICE does),
    /// or `None`.
    pub fn node_index(&self, name: &str) -> Option<usize> {
        self.nodes.iter().position(|n| n.eq_ignore_ascii_case(name))
    }

    /// The index of the node with this name, or an error naming it.
    pub fn require_node(&self, name: &str) -> Result<usize, CircuitError> {
        self.node_index(name)
            .ok_or_else(|| CircuitError::NoSuchNode {
                name: name.to_string(),
            })
    }

    /// The index of the node with this name, created if new. `"0"` is
    /// ground (index 0). Names are checked by [`Netlist::validate`].
    pub fn node(&mut self, name: &str) -> usize {
        self.node_index(name).unwrap_or_else(|| {
            self.nodes.push(name.to_string());
            self.nodes.len() - 1
        })
    }

    /// Appends an element after checking its name (prefix, characters,
    /// uniqueness), values and node indices; returns its index.
    pub fn add(&mut self, element: Element) -> Result<usize, CircuitError> {
        element.check_name()?;
        element.check_values()?;
        element.check_nodes(&self.nodes)?;
        let index = self.elements.len();
        if let Some(first) = self.element_index(element.name()) {
            return Err(CircuitError::DuplicateName {
                name: element.name().to_string(),
                first,
                second: index,
            });
        }
        self.elements.push(element);
        Ok(index)
    }

    /// A copy without the elements `keep` refuses (by index), and
    /// without the nodes only they touched, so what is left can be
    /// solved (a node with nothing on it makes the system singular).
    pub fn retaining(&self, mut keep: impl FnMut(usize) -> bool) -> Result<Netlist, CircuitError> {
        let mut out = Netlist::new(self.title.clone());
        for (i, e) in self.elements.iter().enumerate() {
            if keep(i) {
                let moved = e.with_nodes(&mut |n| out.node(&self.nodes[n]));
                out.add(moved)?;
            }
        }
        Ok(out)
    }

    /// The index of the element with this name (ignoring case), or `None`.
    pub fn element_index(&self, name: &str) -> Option<usize> {
        self.elements
            .iter()
            .position(|e| e.name().eq_ignore_ascii_case(name))
    }

    /// Replaces the value of element `index` (see [`Element::set_value`]).
    pub fn set_value(&mut self, index: usize, value: f64) -> Result<(), CircuitError> {
        self.element_mut(index)?.set_value(value)
    }

    /// The element at `index`, or [`CircuitError::ElementOutOfRange`].
    pub fn element_mut(&mut self, index: usize) -> Result<&mut Element, CircuitError> {
        let count = self.elements.len();
        self.elements
            .get_mut(index)
            .ok_or(CircuitError::ElementOutOfRange { index, count })
    }

    /// How many elements of this kind.
    pub fn count(&self, kind: ElementKind) -> usize {
        self.elements.iter().filter(|e| e.kind() == kind).count()
    }

    /// Checks every invariant listed in the module documentation and names
    /// the first offending node or element.
    pub fn validate(&self) -> Result<(), CircuitError> {
        self.validate_nodes()?;
        for (index, element) in self.elements.iter().enumerate() {
            element.check_name()?;
            element.check_values()?;
            element.check_nodes(&self.nodes)?;
            let first = self.element_index(element.name()).unwrap_or(index);
            if first != index {
                return Err(CircuitError::DuplicateName {
                    name: element.name().to_string(),
                    first,
                    second: index,
                });
            }
        }
        self.validate_connections()
    }

    fn validate_nodes(&self) -> Result<(), CircuitError> {
        if self.nodes.first().map(String::as_str) != Some("0") {
            return Err(CircuitError::NoGround {
                got: self.nodes.first().cloned(),
            });
        }
        for (index, name) in self.nodes.iter().enumerate().skip(1) {
            if !is_node_name(name) {
                return Err(CircuitError::BadNodeName {
                    index,
                    name: name.clone(),
                });
            }
            let first = self.node_index(name).unwrap_or(index);
            if first != index {
                return Err(CircuitError::DuplicateNode {
                    name: name.clone(),
                    first,
                    second: index,
                });
            }
        }
        Ok(())
    }

    /// Every non-ground node needs two terminals, or one op-amp output:
    /// otherwise its nodal equation is empty or leaves its voltage free.
    fn validate_connections(&self) -> Result<(), CircuitError> {
        let mut touches = vec![(0usize, false, None::<usize>); self.nodes.len()];
        for (index, element) in self.elements.iter().enumerate() {
            for (node, role) in element.terminals() {
                let t = &mut touches[node];
                t.0 += 1;
                t.1 |= role == Terminal::Output;
                t.2 = Some(index);
            }
        }
        for (node, &(count, driven, last)) in touches.iter().enumerate().skip(1) {
            let name = self.nodes[node].clone();
            match last {
                None => return Err(CircuitError::UnusedNode { node: name }),
                Some(element) if count < 2 && !driven => {
                    return Err(CircuitError::DanglingNode {
                        node: name,
                        element: self.elements[element].name().to_string(),
                    })
                }
                Some(_) => {}
            }
        }
        Ok(())
    }
}

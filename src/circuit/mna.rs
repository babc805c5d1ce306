//! The fast AC solver: modified nodal analysis in the form
//! (G + sC) x = b with real G, C and b, built once per netlist.
//!
//! Every element stamps entries that are linear in s:
//! - R: 1/R into G; C: its capacitance into C (ordinary admittance stamps).
//! - L: branch current i; KCL gets +-i, and its row v_a - v_b - sL i = 0.
//! - V: branch current i; its row v_pos - v_neg = ac_volt (into b).
//! - Op-amp, output current i into its output node o' (the `out` node, or
//!   an internal node followed by the output resistor). Its row is the
//!   single-pole law A(s) = A0 / (1 + s/wp), wp = 2 pi gbw / A0, divided
//!   by A0:  -(v+ - v-) + (1/A0) v_o' + s (1/(2 pi gbw)) v_o' = 0.
//!   The ideal op-amp (nullor) is the same row with both coefficients 0,
//!   so both models share one pattern and a model change is a refill.
//!   A two-pole op-amp, A(s) = A0 / ((1 + s/w1)(1 + s/w2)), has the same
//!   row on the output p of its first pole (an unknown of its own), and
//!   p's row is the second pole, a unity-gain lag onto the output:
//!   -p + v_o' + s (1/w2) v_o' = 0.
//!
//! Invariant: each matrix entry ("slot") equals the sum, in element order,
//! of the contributions ("terms") of the elements that touch it; an
//! element's terms are contiguous and their targets depend only on the
//! circuit's structure, never on its values. So [`AcSystem::set_value`]
//! recomputes one element's terms and re-sums only the slots it touches,
//! giving bit for bit the matrix a fresh build would give.

use std::collections::HashMap;
use std::f64::consts::TAU;
use std::ops::Range;

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

use super::layout::{Extras, Layout, OpAmpUnknowns};
use super::lu::Lu;
use super::netlist::check_model;
use super::{CircuitError, Element, Netlist, OpAmpModel, Response, RESONANCE_STEP};

/// One entry of G, C or b, by unknown index (see
/// [`AcSystem::unknown_of_node`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Target {
    /// G(row, column).
    G(usize, usize),
    /// C(row, column).
    C(usize, usize),
    /// b(row).
    B(usize),
}

/// Which matrix an admittance stamp goes to.
#[derive(Clone, Copy)]
enum Matrix {
    G,
    C,
}

impl Matrix {
    fn at(self, row: usize, col: usize) -> Target {
        match self {
            Matrix::G => Target::G(row, col),
            Matrix::C => Target::C(row, col),
        }
    }
}

/// Stamps an admittance y between two unknowns (`None` is ground).
fn admittance(
    emit: &mut dyn FnMut(Target, f64),
    m: Matrix,
    a: Option<usize>,
    b: Option<usize>,
    y: f64,
) {
    if let Some(a) = a {
        emit(m.at(a, a), y);
    }
    if let Some(b) = b {
        emit(m.at(b, b), y);
    }
    if let (Some(a), Some(b)) = (a, b) {
        emit(m.at(a, b), -y);
        emit(m.at(b, a), -y);
    }
}

/// Stamps a branch current k leaving unknown `a` and entering `b`, and the
/// row's voltage part v_a - v_b.
fn branch(emit: &mut dyn FnMut(Target, f64), k: usize, a: Option<usize>, b: Option<usize>) {
    for (node, sign) in [(a, 1.0), (b, -1.0)] {
        if let Some(n) = node {
            emit(Target::G(n, k), sign);
            emit(Target::G(k, n), sign);
        }
    }
}

/// The coefficients of an op-amp's (scaled) rows: 1/A0 into G and
/// 1/(2 pi gbw) into C of its gain row, all 0 for the nullor, and 1/w2
/// into C of the second pole's row (0 without one).
fn opamp_coefficients(model: &OpAmpModel) -> (f64, f64, f64) {
    match *model {
        OpAmpModel::Ideal => (0.0, 0.0, 0.0),
        OpAmpModel::SinglePole {
            dc_gain, gbw_hz, ..
        } => (1.0 / dc_gain, 1.0 / (TAU * gbw_hz), 0.0),
        OpAmpModel::TwoPole {
            dc_gain,
            gbw_hz,
            second_pole_hz,
            ..
        } => (
            1.0 / dc_gain,
            1.0 / (TAU * gbw_hz),
            1.0 / (TAU * second_pole_hz),
        ),
    }
}

/// Emits every stamp of one element.
fn stamps(element: &Element, extras: Extras, layout: &Layout, emit: &mut dyn FnMut(Target, f64)) {
    let node = |n: usize| layout.node(n);
    // Layout::new gives every L, V and op-amp a current unknown and R, C
    // never read k, so the placeholder cannot reach a matrix.
    let k = extras.current.unwrap_or(usize::MAX);
    match *element {
        Element::Resistor { a, b, ohm, .. } => {
            admittance(emit, Matrix::G, node(a), node(b), 1.0 / ohm)
        }
        Element::Capacitor { a, b, farad, .. } => {
            admittance(emit, Matrix::C, node(a), node(b), farad)
        }
        Element::Inductor { a, b, henry, .. } => {
            branch(emit, k, node(a), node(b));
            emit(Target::C(k, k), -henry);
        }
        Element::VoltageSource {
            pos, neg, ac_volt, ..
        } => {
            branch(emit, k, node(pos), node(neg));
            emit(Target::B(k), ac_volt);
        }
        Element::OpAmp {
            plus,
            minus,
            out,
            ref model,
            ..
        } => {
            let (g_gain, c_gain, c_second) = opamp_coefficients(model);
            let driven = extras.internal.or(node(out));
            if let Some(o) = driven {
                emit(Target::G(o, k), 1.0);
            }
            // The gain row acts on the first pole's output where there is
            // a second pole, else straight on the driven node.
            if let Some(p) = extras.pole.or(driven) {
                emit(Target::G(k, p), g_gain);
                emit(Target::C(k, p), c_gain);
            }
            for (input, sign) in [(plus, -1.0), (minus, 1.0)] {
                if let Some(n) = node(input) {
                    emit(Target::G(k, n), sign);
                }
            }
            if let Some(p) = extras.pole {
                emit(Target::G(p, p), -1.0);
                if let Some(o) = driven {
                    emit(Target::G(p, o), 1.0);
                    emit(Target::C(p, o), c_second);
                }
            }
            if extras.internal.is_some() {
                admittance(
                    emit,
                    Matrix::G,
                    extras.internal,
                    node(out),
                    1.0 / model.output_ohm(),
                );
            }
        }
    }
}

/// A transfer with its adjoint solution, from [`AcSystem::transfer_adjoint`].
///
/// With A = G + sC, A x = b and H = V(out)/V(inp), the adjoint y solves
/// A^T y = e_out / V(out) - e_inp / V(inp) (plain transpose), so that for
/// any parameter p of A, d ln H / dp = -y^T (dA/dp) x: one extra solve
/// gives the derivative with respect to every element at once (the
/// adjoint-network method of Director and Rohrer, "The generalized adjoint
/// network and network sensitivities", IEEE Trans. Circuit Theory CT-16,
/// 1969).
#[derive(Debug, Clone, Copy)]
pub struct Adjoint<'a> {
    /// H = V(out) / V(inp).
    pub h: Complex64,
    /// The solution: every unknown, indexed like the columns of G (see
    /// [`AcSystem::unknown_of_node`]).
    pub x: &'a [Complex64],
    /// The adjoint solution, indexed like the rows of G (one entry per
    /// equation), so that y^T (dA/dp) x pairs y[row] with x[column].
    pub y: &'a [Complex64],
}

/// The nodal equations of one netlist, ready to solve at any frequency.
#[derive(Debug, Clone)]
pub struct AcSystem {
    netlist: Netlist,
    layout: Layout,
    g: DMatrix<f64>,
    c: DMatrix<f64>,
    b: DVector<f64>,
    /// The entry each slot fills.
    slots: Vec<Target>,
    /// The terms summed into each slot, in element order.
    slot_terms: Vec<Vec<usize>>,
    /// Value of each term.
    terms: Vec<f64>,
    /// The contiguous terms of each element.
    element_terms: Vec<Range<usize>>,
    /// The distinct slots each element touches.
    element_slots: Vec<Vec<usize>>,
    lu: Lu,
    x: Vec<Complex64>,
    dx: Vec<Complex64>,
}

impl AcSystem {
    /// Validates the netlist, numbers the unknowns and records every stamp.
    pub fn new(netlist: &Netlist) -> Result<AcSystem, CircuitError> {
        netlist.validate()?;
        let layout = Layout::new(netlist);
        let n = layout.size;
        let mut index: HashMap<Target, usize> = HashMap::new();
        let mut system = AcSystem {
            netlist: netlist.clone(),
            g: DMatrix::zeros(n, n),
            c: DMatrix::zeros(n, n),
            b: DVector::zeros(n),
            slots: Vec::new(),
            slot_terms: Vec::new(),
            terms: Vec::new(),
            element_terms: Vec::new(),
            element_slots: Vec::new(),
            lu: Lu::new(n),
            x: vec![Complex64::new(0.0, 0.0); n],
            dx: vec![Complex64::new(0.0, 0.0); n],
            layout,
        };
        for (element, &extras) in netlist.elements.iter().zip(&system.layout.extras) {
            let start = system.terms.len();
            let mut touched = Vec::new();
            stamps(element, extras, &system.layout, &mut |target, value| {
                let slot = *index.entry(target).or_insert_with(|| {
                    system.slots.push(target);
                    system.slot_terms.push(Vec::new());
                    system.slots.len() - 1
                });
                system.slot_terms[slot].push(system.terms.len());
                system.terms.push(value);
                if !touched.contains(&slot) {
                    touched.push(slot);
                }
            });
            system.element_terms.push(start..system.terms.len());
            system.element_slots.push(touched);
        }
        for slot in 0..system.slots.len() {
            system.resum(slot);
        }
        Ok(system)
    }

    /// Writes the sum of a slot's terms into its matrix entry.
    fn resum(&mut self, slot: usize) {
        let sum: f64 = self.slot_terms[slot].iter().map(|&t| self.terms[t]).sum();
        match self.slots[slot] {
            Target::G(r, c) => self.g[(r, c)] = sum,
            Target::C(r, c) => self.c[(r, c)] = sum,
            Target::B(r) => self.b[r] = sum,
        }
    }

    /// Recomputes the terms of one element from the stored netlist and
    /// re-sums the slots it touches.
    fn refill(&mut self, index: usize) {
        let range = self.element_terms[index].clone();
        let mut next = range.start;
        let terms = &mut self.terms;
        stamps(
            &self.netlist.elements[index],
            self.layout.extras[index],
            &self.layout,
            &mut |_, value| {
                terms[next] = value;
                next += 1;
            },
        );
        debug_assert_eq!(next, range.end, "stamp pattern depends on values");
        for i in 0..self.element_slots[index].len() {
            self.resum(self.element_slots[index][i]);
        }
    }

    /// Changes the value of element `index` (ohm, farad, henry, or AC
    /// volt) and refills only its stamps.
    pub fn set_value(&mut self, index: usize, value: f64) -> Result<(), CircuitError> {
        self.netlist.set_value(index, value)?;
        self.refill(index);
        Ok(())
    }

    /// Changes the model of op-amp `index` and refills only its stamps.
    /// Ideal and single-pole models share one pattern; a change that adds
    /// or removes an unknown (output resistance between zero and non-zero,
    /// a second pole or none) needs a new system.
    pub fn set_opamp_model(&mut self, index: usize, new: OpAmpModel) -> Result<(), CircuitError> {
        let element = self.netlist.element_mut(index)?;
        let Element::OpAmp { name, model, .. } = element else {
            return Err(CircuitError::NotAnOpAmp {
                name: element.name().to_string(),
            });
        };
        check_model(name, &new)?;
        if OpAmpUnknowns::of(model) != OpAmpUnknowns::of(&new) {
            return Err(CircuitError::OpAmpStructure {
                name: name.clone(),
                old: model.kind(),
                old_ohm: model.output_ohm(),
                new: new.kind(),
                new_ohm: new.output_ohm(),
            });
        }
        *model = new;
        self.refill(index);
        Ok(())
    }

    /// The netlist with every value change applied so far.
    pub fn netlist(&self) -> &Netlist {
        &self.netlist
    }

    /// The real matrix G (conductances and the frequency-independent part
    /// of every branch row).
    pub fn g(&self) -> &DMatrix<f64> {
        &self.g
    }

    /// The real matrix C (the part multiplied by s).
    pub fn c(&self) -> &DMatrix<f64> {
        &self.c
    }

    /// The excitation b (AC source magnitudes, phase 0).
    pub fn b(&self) -> &DVector<f64> {
        &self.b
    }

    /// The unknown holding a node's voltage (`None` for ground), so rows
    /// and columns of [`AcSystem::g`] and [`AcSystem::c`] can be read.
    pub fn unknown_of_node(&self, node: usize) -> Option<usize> {
        self.layout.node(node)
    }

    /// The equation of op-amp `index`'s gain law (its output current's
    /// row), where a voltage e in series with its non-inverting input
    /// enters as b = e: the row reads -(v+ + e - v-) + ... = 0. `None`
    /// for an element that is not an op-amp.
    pub fn opamp_row(&self, index: usize) -> Option<usize> {
        match self.netlist.elements.get(index) {
            Some(Element::OpAmp { .. }) => self.layout.extras[index].current,
            _ => None,
        }
    }

    /// Every stamp of element `index` as (entry, value), in the order the
    /// element emits them; entries of one element may repeat (their values
    /// add). The matrix entry is the sum over all elements' stamps on it.
    pub fn element_stamps(&self, index: usize) -> Result<Vec<(Target, f64)>, CircuitError> {
        let element = self
            .netlist
            .elements
            .get(index)
            .ok_or(CircuitError::ElementOutOfRange {
                index,
                count: self.netlist.elements.len(),
            })?;
        let mut out = Vec::new();
        stamps(
            element,
            self.layout.extras[index],
            &self.layout,
            &mut |target, value| out.push((target, value)),
        );
        Ok(out)
    }

    /// Factors G + j 2 pi f C and solves into `x`.
    fn solve(&mut self, freq_hz: f64) -> Result<(), CircuitError> {
        if !(freq_hz.is_finite() && freq_hz >= 0.0) {
            return Err(CircuitError::BadFrequency { freq_hz });
        }
        if !self
            .lu
            .factor(&self.g, &self.c, Complex64::new(0.0, TAU * freq_hz))
        {
            return Err(CircuitError::Singular { freq_hz });
        }
        for (x, &b) in self.x.iter_mut().zip(self.b.iter()) {
            *x = Complex64::new(b, 0.0);
        }
        self.lu.solve(&mut self.x);
        if self.x.iter().all(|z| z.is_finite()) {
            Ok(())
        } else {
            Err(CircuitError::Singular { freq_hz })
        }
    }

    /// Checks a node index for `context`.
    fn check_node(&self, node: usize, context: &str) -> Result<(), CircuitError> {
        if node < self.layout.node_count {
            Ok(())
        } else {
            Err(CircuitError::NodeOutOfRange {
                context: context.to_string(),
                node,
                node_count: self.layout.node_count,
            })
        }
    }

    /// The voltage of a node in the last solution (0 for ground).
    fn voltage(&self, node: usize) -> Complex64 {
        self.layout
            .node(node)
            .map_or(Complex64::new(0.0, 0.0), |i| self.x[i])
    }

    /// Checks both nodes, solves, and returns (V(out), V(inp)) with
    /// V(inp) non-zero.
    fn pair(
        &mut self,
        freq_hz: f64,
        out: usize,
        inp: usize,
    ) -> Result<(Complex64, Complex64), CircuitError> {
        self.check_node(out, "output")?;
        self.check_node(inp, "input")?;
        self.solve(freq_hz)?;
        let vin = self.voltage(inp);
        if vin == Complex64::new(0.0, 0.0) {
            return Err(CircuitError::ZeroVoltage { node: inp, freq_hz });
        }
        Ok((self.voltage(out), vin))
    }

    /// V(out) / V(inp) at one frequency. Allocates nothing.
    pub fn transfer(
        &mut self,
        freq_hz: f64,
        out: usize,
        inp: usize,
    ) -> Result<Complex64, CircuitError> {
        let mut at = |f: f64| self.pair(f, out, inp).map(|(vout, vin)| vout / vin);
        match at(freq_hz) {
            // Across a lossless resonance, as DenseDelay::point does; if
            // a side is singular too, the point's own error stands.
            Err(e @ CircuitError::Singular { .. }) if freq_hz > 0.0 => {
                let sides = [1.0 - RESONANCE_STEP, 1.0 + RESONANCE_STEP].map(|k| at(freq_hz * k));
                match sides {
                    [Ok(below), Ok(above)] => Ok((below + above) / 2.0),
                    _ => Err(e),
                }
            }
            other => other,
        }
    }

    /// V(out)/V(inp) at one frequency with the full solution and its
    /// adjoint (see [`Adjoint`]): one factorization, one solve and one
    /// transposed solve. V(out) must be non-zero. Allocates nothing.
    pub fn transfer_adjoint(
        &mut self,
        freq_hz: f64,
        out: usize,
        inp: usize,
    ) -> Result<Adjoint<'_>, CircuitError> {
        let (vout, vin) = self.pair(freq_hz, out, inp)?;
        if vout == Complex64::new(0.0, 0.0) {
            return Err(CircuitError::ZeroVoltage { node: out, freq_hz });
        }
        self.dx.fill(Complex64::new(0.0, 0.0));
        // Both nodes are non-ground here (their voltages are non-zero).
        for (node, weight) in [(out, 1.0 / vout), (inp, -1.0 / vin)] {
            if let Some(i) = self.layout.node(node) {
                self.dx[i] += weight;
            }
        }
        self.lu.solve_transposed(&mut self.dx);
        Ok(Adjoint {
            h: vout / vin,
            x: &self.x,
            y: &self.dx,
        })
    }

    /// The adjoint of node `out` at one frequency, by the dense LU: y
    /// solving (G + j 2 pi f C)^T y = e_out, indexed by equation (see
    /// [`SparseAc::adjoint_sweep`](super::SparseAc::adjoint_sweep), the
    /// fast path, which is tested against this one).
    pub fn output_adjoint(
        &mut self,
        freq_hz: f64,
        out: usize,
    ) -> Result<&[Complex64], CircuitError> {
        self.check_node(out, "output")?;
        let Some(u) = self.layout.node(out) else {
            return Err(CircuitError::ZeroVoltage { node: out, freq_hz });
        };
        let at = |system: &mut AcSystem, f: f64| -> Result<(), CircuitError> {
            system.solve(f)?;
            system.dx.fill(Complex64::new(0.0, 0.0));
            system.dx[u] = Complex64::new(1.0, 0.0);
            system.lu.solve_transposed(&mut system.dx);
            Ok(())
        };
        match at(self, freq_hz) {
            // Across a lossless resonance, the mean of the two sides (as
            // `transfer` takes it).
            Err(e @ CircuitError::Singular { .. }) if freq_hz > 0.0 => {
                at(self, freq_hz * (1.0 + RESONANCE_STEP)).map_err(|_| e.clone())?;
                let above = self.dx.clone();
                at(self, freq_hz * (1.0 - RESONANCE_STEP)).map_err(|_| e)?;
                for (v, a) in self.dx.iter_mut().zip(above) {
                    *v = (*v + a) / 2.0;
                }
            }
            other => other?,
        }
        Ok(&self.dx)
    }

    /// [`AcSystem::transfer`] at each frequency.
    pub fn sweep(
        &mut self,
        freqs_hz: &[f64],
        out: usize,
        inp: usize,
    ) -> Result<Response, CircuitError> {
        let h = freqs_hz
            .iter()
            .map(|&f| self.transfer(f, out, inp))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(Response {
            freq_hz: freqs_hz.to_vec(),
            h,
        })
    }

    /// Every node voltage at one frequency, indexed like
    /// [`Netlist::nodes`] (entry 0, ground, is 0).
    pub fn node_voltages(&mut self, freq_hz: f64) -> Result<Vec<Complex64>, CircuitError> {
        self.solve(freq_hz)?;
        Ok((0..self.layout.node_count)
            .map(|n| self.voltage(n))
            .collect())
    }

    /// Group delay of V(out)/V(inp) at one frequency, seconds, exact up to
    /// rounding: with A x = b, dx/ds = -A^-1 C x (one more solve with the
    /// same factors), and tau = -d arg H / dw = -Re(d ln H / ds).
    pub fn group_delay(
        &mut self,
        freq_hz: f64,
        out: usize,
        inp: usize,
    ) -> Result<f64, CircuitError> {
        let (vout, vin) = self.pair(freq_hz, out, inp)?;
        if vout == Complex64::new(0.0, 0.0) {
            return Err(CircuitError::ZeroVoltage { node: out, freq_hz });
        }
        for (i, d) in self.dx.iter_mut().enumerate() {
            let cx: Complex64 = (0..self.layout.size)
                .map(|j| self.c[(i, j)] * self.x[j])
                .sum();
            *d = -cx;
        }
        self.lu.solve(&mut self.dx);
        let derivative = |node: usize| {
            self.layout
                .node(node)
                .map_or(Complex64::new(0.0, 0.0), |i| self.dx[i])
        };
        Ok(-(derivative(out) / vout - derivative(inp) / vin).re)
    }
}

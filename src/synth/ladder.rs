//! Laying a ladder out node by node, and evaluating its voltage transfer.
//!
//! Layout (the node contract of [`Ladder`]): node 1 is the input, each
//! series arm leads from the current ladder node to a new one, a shunt arm
//! hangs from the current node to ground, and a shunt series resonator
//! gets an internal node of its own with the inductor on the ladder side
//! and the capacitor to ground (so every shunt capacitor ends at ground,
//! as the FDNR transformation wants). Nodes are numbered in the order they
//! are created.
//!
//! The evaluator is deliberately the slow obvious one: modified nodal
//! analysis of the elements as listed, with the source as a 1 V EMF behind
//! its resistance, solved densely. It reads nothing but the element list,
//! so it checks the layout as well as the values.

use super::{Arm, ArmValues, Element, Form, Ladder, Reactance};
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

impl Ladder {
    /// Lays out the arms, from source to load, between a 1 ohm source and
    /// a load of `load_ohm`.
    ///
    /// The form is read from the first arm (series first: `MinCapacitor`;
    /// shunt first, or no arm: `MinInductor`). `flat_gain` is set to the
    /// ladder's DC voltage gain `r / (1 + r)`, i.e. taken against a
    /// response normalized to 1 at DC; [`crate::synth::synthesize`]
    /// replaces it with the factor against its prototype.
    pub fn from_arms(arms: impl IntoIterator<Item = ArmValues>, load_ohm: f64) -> Ladder {
        let mut layout = Layout {
            elements: Vec::new(),
            node: 1,
            next: 2,
        };
        let mut form = Form::MinInductor;
        for (index, arm) in arms.into_iter().enumerate() {
            if index == 0 && matches!(arm, ArmValues::SeriesL(_) | ArmValues::SeriesTank(..)) {
                form = Form::MinCapacitor;
            }
            layout.push(index, arm);
        }
        Ladder {
            form,
            source_ohm: 1.0,
            load_ohm,
            nodes: layout.next,
            output: layout.node,
            elements: layout.elements,
            flat_gain: load_ohm / (1.0 + load_ohm),
        }
    }

    /// The same ladder with its passband edge moved from 1 rad/s to
    /// `edge_rad_s`: every reactance divided by it (frequency scaling,
    /// s -> s / edge), so the response at `edge_rad_s * w` is this
    /// ladder's at `w`.
    pub fn with_edge_at(&self, edge_rad_s: f64) -> Ladder {
        let mut scaled = self.clone();
        for e in &mut scaled.elements {
            e.value /= edge_rad_s;
        }
        scaled
    }

    /// The voltage transfer V(load) / V(source EMF) at the complex
    /// frequency `s`, source and load resistances included.
    ///
    /// Returns NaN (real and imaginary) when the circuit has no unique
    /// solution at `s` (a natural frequency of the network, or a ladder
    /// whose node numbers break the [`Ladder`] contract).
    pub fn transfer(&self, s: Complex64) -> Complex64 {
        let nan = Complex64::new(f64::NAN, f64::NAN);
        let in_range = |n: usize| n < self.nodes;
        let valid = self.nodes >= 2
            && self.output >= 1
            && in_range(self.output)
            && self.elements.iter().all(|e| in_range(e.a) && in_range(e.b));
        if !valid {
            return nan;
        }
        let voltages = self.nodes - 1;
        let inductors = self
            .elements
            .iter()
            .filter(|e| e.kind == Reactance::Inductor)
            .count();
        let mut mna = Mna {
            a: DMatrix::zeros(voltages + inductors, voltages + inductors),
            next_branch: voltages,
        };
        // A 1 V EMF behind the source resistance is its Norton equivalent:
        // conductance 1/Rs and a current 1/Rs into node 1.
        let mut b = DVector::zeros(voltages + inductors);
        b[0] = Complex64::new(1.0 / self.source_ohm, 0.0);
        mna.admittance(1, 0, Complex64::new(1.0 / self.source_ohm, 0.0));
        mna.admittance(self.output, 0, Complex64::new(1.0 / self.load_ohm, 0.0));
        for e in &self.elements {
            match e.kind {
                Reactance::Capacitor => mna.admittance(e.a, e.b, s * e.value),
                Reactance::Inductor => mna.inductor(e.a, e.b, s * e.value),
            }
        }
        match mna.a.lu().solve(&b) {
            Some(x) => x[self.output - 1],
            None => nan,
        }
    }
}

impl ArmValues {
    /// The arm scaled to impedance level `r`: L times r, C over r.
    pub(crate) fn impedance_scaled(self, r: f64) -> ArmValues {
        match self {
            ArmValues::SeriesL(l) => ArmValues::SeriesL(l * r),
            ArmValues::ShuntC(c) => ArmValues::ShuntC(c / r),
            ArmValues::SeriesTank(l, c) => ArmValues::SeriesTank(l * r, c / r),
            ArmValues::ShuntResonator(l, c) => ArmValues::ShuntResonator(l * r, c / r),
        }
    }
}

/// The modified nodal matrix under construction: node voltages first
/// (node k at row k - 1, ground dropped), then one current per inductor.
struct Mna {
    a: DMatrix<Complex64>,
    next_branch: usize,
}

impl Mna {
    /// Stamps an admittance between nodes `p` and `q` (0 is ground).
    fn admittance(&mut self, p: usize, q: usize, y: Complex64) {
        for (i, j, sign) in [(p, p, 1.0), (q, q, 1.0), (p, q, -1.0), (q, p, -1.0)] {
            if i > 0 && j > 0 {
                self.a[(i - 1, j - 1)] += y * sign;
            }
        }
    }

    /// Stamps an inductor from `p` to `q` of impedance `z = sL` by its
    /// branch current `I` (flowing p to q): KCL gets +I at p and -I at q,
    /// and the branch row says V_p - V_q - z I = 0. It stays regular at
    /// s = 0, where an inductor is a short.
    fn inductor(&mut self, p: usize, q: usize, z: Complex64) {
        let m = self.next_branch;
        self.next_branch += 1;
        for (node, sign) in [(p, 1.0), (q, -1.0)] {
            if node > 0 {
                self.a[(node - 1, m)] += Complex64::new(sign, 0.0);
                self.a[(m, node - 1)] += Complex64::new(sign, 0.0);
            }
        }
        self.a[(m, m)] = -z;
    }
}

/// Node bookkeeping while the arms are laid out.
struct Layout {
    elements: Vec<Element>,
    /// The current ladder node.
    node: usize,
    /// The next unused node number.
    next: usize,
}

impl Layout {
    fn new_node(&mut self) -> usize {
        self.next += 1;
        self.next - 1
    }

    fn element(
        &mut self,
        kind: Reactance,
        value: f64,
        (a, b): (usize, usize),
        arm: Arm,
        arm_index: usize,
    ) {
        self.elements.push(Element {
            kind,
            value,
            a,
            b,
            arm,
            arm_index,
        });
    }

    fn push(&mut self, index: usize, arm: ArmValues) {
        use Reactance::{Capacitor, Inductor};
        let here = self.node;
        match arm {
            ArmValues::SeriesL(l) => {
                let to = self.new_node();
                self.element(Inductor, l, (here, to), Arm::Series, index);
                self.node = to;
            }
            ArmValues::SeriesTank(l, c) => {
                let to = self.new_node();
                self.element(Inductor, l, (here, to), Arm::Series, index);
                self.element(Capacitor, c, (here, to), Arm::Series, index);
                self.node = to;
            }
            ArmValues::ShuntC(c) => self.element(Capacitor, c, (here, 0), Arm::Shunt, index),
            ArmValues::ShuntResonator(l, c) => {
                let inner = self.new_node();
                self.element(Inductor, l, (here, inner), Arm::Shunt, index);
                self.element(Capacitor, c, (inner, 0), Arm::Shunt, index);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A series 1 H into a 1 ohm load from a 1 ohm source:
    /// V/E = 1 / (s + 2) (voltage divider, worked by hand).
    #[test]
    fn series_inductor_divider() {
        let ladder = Ladder::from_arms([ArmValues::SeriesL(1.0)], 1.0);
        assert_eq!(ladder.form, Form::MinCapacitor);
        for s in [
            Complex64::new(0.0, 0.0),
            Complex64::new(0.0, 1.0),
            Complex64::new(0.3, -2.0),
        ] {
            let expected = 1.0 / (s + 2.0);
            assert!((ladder.transfer(s) - expected).norm() < 1e-15, "s = {s}");
        }
    }

    /// A shunt series resonator (1 H, 1 F) across the input shorts the
    /// output at 1 rad/s; with a 2 ohm load and nothing else:
    /// V/E = Z / (1 + Z), Z = 2 || (s + 1/s), worked by hand.
    #[test]
    fn shunt_resonator_notch() {
        let ladder = Ladder::from_arms([ArmValues::ShuntResonator(1.0, 1.0)], 2.0);
        assert_eq!((ladder.nodes, ladder.output), (3, 1));
        let s = Complex64::new(0.0, 0.7);
        let branch = s + 1.0 / s;
        let z = 2.0 * branch / (2.0 + branch);
        assert!((ladder.transfer(s) - z / (1.0 + z)).norm() < 1e-15);
        assert!(ladder.transfer(Complex64::new(0.0, 1.0)).norm() < 1e-15);
    }

    /// The notch of a shunt resonator (1 H, 1 F: 1 rad/s) moves to the
    /// new edge, and the response at k w is the old one's at w (frequency
    /// scaling, worked by hand).
    #[test]
    fn edge_moves_with_the_reactances() {
        let ladder = Ladder::from_arms(
            [ArmValues::ShuntResonator(1.0, 1.0), ArmValues::SeriesL(0.5)],
            2.0,
        );
        let k = 1.25;
        let moved = ladder.with_edge_at(k);
        assert!(moved.transfer(Complex64::new(0.0, k)).norm() < 1e-15);
        for w in [0.1, 0.8, 3.0] {
            let (a, b) = (
                ladder.transfer(Complex64::new(0.0, w)),
                moved.transfer(Complex64::new(0.0, k * w)),
            );
            assert!((a - b).norm() < 1e-14 * a.norm(), "w = {w}");
        }
    }

    /// Bad node numbers give NaN, not a panic.
    #[test]
    fn broken_contract_is_nan() {
        let mut ladder = Ladder::from_arms([ArmValues::SeriesL(1.0)], 1.0);
        ladder.output = 7;
        assert!(ladder.transfer(Complex64::new(0.0, 1.0)).re.is_nan());
    }
}

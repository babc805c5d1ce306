//! The slow, obviously correct AC solve kept as the oracle of the fast
//! path ([`super::AcSystem`]).
//!
//! It assembles a fresh dense complex matrix straight from the netlist at
//! one s = j 2 pi f, writing each element's textbook equation unscaled
//! (the op-amp row as (1 + s/wp) v_o' - A0 (v+ - v-) = 0, the nullor as
//! v+ - v- = 0; a two-pole op-amp as two lags in cascade,
//! (1 + s/w1) p - A0 (v+ - v-) = 0 and (1 + s/w2) v_o' - p = 0), and
//! solves with nalgebra's fully pivoted LU. It shares only the numbering
//! of unknowns with the fast path, nothing of its stamping, scaling or
//! elimination.

use std::f64::consts::TAU;

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

use super::layout::Layout;
use super::{CircuitError, Element, Netlist, OpAmpModel};

/// Rank test of the fully pivoted LU: the pivots come out in decreasing
/// size, so a last pivot this far below the first one means the matrix is
/// singular up to rounding (the fast path's floor plays the same role).
const RANK_RATIO: f64 = 1e3 * f64::EPSILON;

/// Adds y between two unknowns (`None` is ground).
fn add_admittance(m: &mut DMatrix<Complex64>, a: Option<usize>, b: Option<usize>, y: Complex64) {
    if let Some(a) = a {
        m[(a, a)] += y;
    }
    if let Some(b) = b {
        m[(b, b)] += y;
    }
    if let (Some(a), Some(b)) = (a, b) {
        m[(a, b)] -= y;
        m[(b, a)] -= y;
    }
}

/// Adds +-1 in row and column k for a current leaving `a`, entering `b`.
fn add_branch(m: &mut DMatrix<Complex64>, k: usize, a: Option<usize>, b: Option<usize>) {
    let one = Complex64::new(1.0, 0.0);
    if let Some(a) = a {
        m[(a, k)] += one;
        m[(k, a)] += one;
    }
    if let Some(b) = b {
        m[(b, k)] -= one;
        m[(k, b)] -= one;
    }
}

/// The complex system (matrix, right-hand side) at s.
fn assemble(
    netlist: &Netlist,
    layout: &Layout,
    s: Complex64,
) -> (DMatrix<Complex64>, DVector<Complex64>) {
    let n = layout.size;
    let mut m = DMatrix::zeros(n, n);
    let mut rhs = DVector::zeros(n);
    let node = |i: usize| layout.node(i);
    for (element, extras) in netlist.elements.iter().zip(&layout.extras) {
        // Only L, V and op-amps read k, and Layout::new gives each one.
        let k = extras.current.unwrap_or(usize::MAX);
        match *element {
            Element::Resistor { a, b, ohm, .. } => {
                add_admittance(&mut m, node(a), node(b), Complex64::new(1.0 / ohm, 0.0))
            }
            Element::Capacitor { a, b, farad, .. } => {
                add_admittance(&mut m, node(a), node(b), s * farad)
            }
            Element::Inductor { a, b, henry, .. } => {
                add_branch(&mut m, k, node(a), node(b));
                m[(k, k)] -= s * henry;
            }
            Element::VoltageSource {
                pos, neg, ac_volt, ..
            } => {
                add_branch(&mut m, k, node(pos), node(neg));
                rhs[k] = Complex64::new(ac_volt, 0.0);
            }
            Element::OpAmp {
                plus,
                minus,
                out,
                model,
                ..
            } => {
                let o = extras.internal.or(node(out));
                if let Some(o) = o {
                    m[(o, k)] += 1.0;
                }
                if extras.internal.is_some() {
                    add_admittance(
                        &mut m,
                        extras.internal,
                        node(out),
                        Complex64::new(1.0 / model.output_ohm(), 0.0),
                    );
                }
                // The unknown the gain row drives: the first pole's output
                // where a second pole follows, else the output itself.
                let driven = extras.pole.or(o);
                // (gain on v+ - v-, coefficient of the driven unknown).
                let (gain, own) = match model {
                    OpAmpModel::Ideal => (Complex64::new(1.0, 0.0), Complex64::new(0.0, 0.0)),
                    OpAmpModel::SinglePole {
                        dc_gain, gbw_hz, ..
                    }
                    | OpAmpModel::TwoPole {
                        dc_gain, gbw_hz, ..
                    } => {
                        let wp = TAU * gbw_hz / dc_gain;
                        (Complex64::new(-dc_gain, 0.0), 1.0 + s / wp)
                    }
                };
                if let Some(p) = node(plus) {
                    m[(k, p)] += gain;
                }
                if let Some(q) = node(minus) {
                    m[(k, q)] -= gain;
                }
                if let Some(d) = driven {
                    m[(k, d)] += own;
                }
                if let (Some(p), OpAmpModel::TwoPole { second_pole_hz, .. }) = (extras.pole, model)
                {
                    m[(p, p)] -= 1.0;
                    if let Some(o) = o {
                        m[(p, o)] += 1.0 + s / (TAU * second_pole_hz);
                    }
                }
            }
        }
    }
    (m, rhs)
}

/// V(out) / V(inp) at one frequency, solved from scratch.
pub fn reference_transfer(
    netlist: &Netlist,
    freq_hz: f64,
    out: usize,
    inp: usize,
) -> Result<Complex64, CircuitError> {
    netlist.validate()?;
    if !(freq_hz.is_finite() && freq_hz >= 0.0) {
        return Err(CircuitError::BadFrequency { freq_hz });
    }
    for (node, context) in [(out, "output"), (inp, "input")] {
        if node >= netlist.nodes.len() {
            return Err(CircuitError::NodeOutOfRange {
                context: context.to_string(),
                node,
                node_count: netlist.nodes.len(),
            });
        }
    }
    let layout = Layout::new(netlist);
    let x = if layout.size == 0 {
        DVector::zeros(0)
    } else {
        let (m, rhs) = assemble(netlist, &layout, Complex64::new(0.0, TAU * freq_hz));
        let lu = m.full_piv_lu();
        let u = lu.u();
        let n = layout.size;
        if u[(n - 1, n - 1)].norm() <= RANK_RATIO * u[(0, 0)].norm() {
            return Err(CircuitError::Singular { freq_hz });
        }
        lu.solve(&rhs).ok_or(CircuitError::Singular { freq_hz })?
    };
    let v = |i: usize| layout.node(i).map_or(Complex64::new(0.0, 0.0), |j| x[j]);
    if v(inp) == Complex64::new(0.0, 0.0) {
        return Err(CircuitError::ZeroVoltage { node: inp, freq_hz });
    }
    Ok(v(out) / v(inp))
}

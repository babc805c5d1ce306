//! The stability verdict of a netlist from its natural frequencies: the
//! roots of det(G + sC) with every source set to zero.
//!
//! A zeroed voltage source is a short, so its two nodes are merged before
//! the roots are computed (by [`AcSystem::natural_frequencies`]). That is
//! the same network, but kept as an MNA branch a source closes loops of
//! capacitors and op-amp outputs (in the FDNR image: the source
//! capacitor, an FDNR's input capacitor and its op-amp) that raise the
//! index of the equations; their infinite eigenvalues then come out
//! perturbed by about the square root of rounding (measured: a spurious
//! pair near 1e15 rad/s that moved with the solver's shift), where the
//! merged network has none.
//!
//! A circuit is called stable when every natural frequency lies strictly
//! inside the left half plane by a relative margin: Re(s) < -margin |s|.
//! The margin keeps a root that rounding has moved off the imaginary axis
//! (a lossless resonance, a capacitor-only node at s = 0) from passing as
//! stable.

use num_complex::Complex64;

use super::error::ActiveError;
use crate::circuit::{AcSystem, CircuitError, Element, Netlist, OpAmpModel};

/// Relative margin of [`StabilityVerdict::stable`]. The roots come from a
/// shifted eigenvalue problem accurate to about 1e-10 of |s| on the
/// circuit module's closed-form checks; 1e-9 sits above that noise and far
/// below the damping of any pole of a realizable filter (a pole Q of 1e4
/// has Re(s) = -5e-5 |s|).
pub const STABILITY_MARGIN: f64 = 1e-9;

/// Impedance scalings tried in turn when the eigenvalue iteration does not
/// converge. Scaling every impedance by one factor leaves every natural
/// frequency unchanged but changes the matrices' balance between
/// conductances and the unit entries of the branch rows, so the shifted
/// QR iteration sees a different matrix; networks of many identical
/// converters (repeated eigenvalues) occasionally stall it (measured: one
/// bandpass build of 16 op-amps at GBW 10 MHz, which converged at every
/// factor from 1/10 to 10 but 1).
const RETRY_SCALINGS: [f64; 3] = [
    1.0,
    std::f64::consts::SQRT_2,
    std::f64::consts::FRAC_1_SQRT_2,
];

/// Whether a circuit is stable, and its rightmost natural frequency.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct StabilityVerdict {
    /// Every natural frequency has Re(s) < -[`STABILITY_MARGIN`] |s|.
    pub stable: bool,
    /// The natural frequency with the largest real part, rad/s, or `None`
    /// for a circuit without dynamics.
    pub rightmost: Option<Complex64>,
    /// How many finite natural frequencies the circuit has.
    pub count: usize,
}

/// The stability verdict of `netlist` with its own op-amp models.
pub fn is_stable(netlist: &Netlist) -> Result<StabilityVerdict, ActiveError> {
    netlist.validate()?;
    let (shorted, lossless_loops) = short_sources(netlist);
    let mut roots = roots_of(&shorted)?;
    // An inductor across a source keeps its current for ever: a root at 0.
    roots.extend(std::iter::repeat_n(
        Complex64::new(0.0, 0.0),
        lossless_loops,
    ));
    roots.sort_by(|a, b| b.re.total_cmp(&a.re));
    let stable = roots.iter().all(|s| s.re < -STABILITY_MARGIN * s.norm());
    Ok(StabilityVerdict {
        stable,
        rightmost: roots.first().copied(),
        count: roots.len(),
    })
}

/// The natural frequencies, retrying at the [`RETRY_SCALINGS`] when the
/// eigenvalue iteration does not converge.
fn roots_of(netlist: &Netlist) -> Result<Vec<Complex64>, ActiveError> {
    let attempt = |beta| AcSystem::new(&impedance_scaled(netlist, beta))?.natural_frequencies();
    let mut outcome = attempt(RETRY_SCALINGS[0]);
    for &beta in &RETRY_SCALINGS[1..] {
        if matches!(outcome, Err(CircuitError::NoConvergence { .. })) {
            outcome = attempt(beta);
        }
    }
    Ok(outcome?)
}

/// Every impedance times `beta`: R, L and op-amp output resistances up,
/// capacitances down.
fn impedance_scaled(netlist: &Netlist, beta: f64) -> Netlist {
    let mut scaled = netlist.clone();
    for element in &mut scaled.elements {
        match element {
            Element::Resistor { ohm: v, .. } | Element::Inductor { henry: v, .. } => *v *= beta,
            Element::Capacitor { farad, .. } => *farad /= beta,
            Element::OpAmp {
                model: OpAmpModel::SinglePole { output_ohm, .. },
                ..
            } => *output_ohm *= beta,
            Element::OpAmp { .. } | Element::VoltageSource { .. } => {}
        }
    }
    scaled
}

/// Rewrites every node index of an element through `f`.
fn map_nodes(element: &mut Element, f: impl Fn(usize) -> usize) {
    match element {
        Element::Resistor { a, b, .. }
        | Element::Capacitor { a, b, .. }
        | Element::Inductor { a, b, .. }
        | Element::VoltageSource { pos: a, neg: b, .. } => (*a, *b) = (f(*a), f(*b)),
        Element::OpAmp {
            plus, minus, out, ..
        } => (*plus, *minus, *out) = (f(*plus), f(*minus), f(*out)),
    }
}

/// The netlist with every voltage source replaced by a short (its nodes
/// merged, ground kept), elements left with both ends on one node
/// dropped, and nodes left untouched removed; also the number of dropped
/// inductors.
fn short_sources(netlist: &Netlist) -> (Netlist, usize) {
    let mut merged: Vec<usize> = (0..netlist.nodes.len()).collect();
    let find = |merged: &[usize], mut n: usize| {
        while merged[n] != n {
            n = merged[n];
        }
        n
    };
    for element in &netlist.elements {
        if let Element::VoltageSource { pos, neg, .. } = *element {
            let (a, b) = (find(&merged, pos), find(&merged, neg));
            merged[a.max(b)] = a.min(b);
        }
    }
    let mut kept = Vec::new();
    let mut lossless_loops = 0;
    for element in &netlist.elements {
        if let Element::VoltageSource { .. } = element {
            continue;
        }
        let mut e = element.clone();
        map_nodes(&mut e, |n| find(&merged, n));
        if let [(a, _), (b, _)] = e.terminals()[..] {
            if a == b {
                lossless_loops += usize::from(matches!(e, Element::Inductor { .. }));
                continue;
            }
        }
        kept.push(e);
    }
    (renumber(netlist, kept), lossless_loops)
}

/// A netlist of `elements` (indices into `original`'s nodes) with only
/// the nodes they touch, ground first.
fn renumber(original: &Netlist, mut elements: Vec<Element>) -> Netlist {
    let mut used = vec![false; original.nodes.len()];
    used[0] = true;
    for e in &elements {
        for (n, _) in e.terminals() {
            used[n] = true;
        }
    }
    let mut index = vec![0; original.nodes.len()];
    let mut nodes = Vec::new();
    for (old, name) in original.nodes.iter().enumerate() {
        if used[old] {
            index[old] = nodes.len();
            nodes.push(name.clone());
        }
    }
    for e in &mut elements {
        map_nodes(e, |n| index[n]);
    }
    Netlist {
        title: original.title.clone(),
        nodes,
        elements,
    }
}

//! The stability verdict of a netlist from its natural frequencies: the
//! roots of det(G + sC) with every source set to zero.
//!
//! The roots come from the eigenvalues of a reduced matrix (see
//! [`reduced_roots`]) rather than from [`AcSystem::natural_frequencies`]:
//! that one works on every unknown, and the hundreds of infinite roots of
//! a build with 50 op-amps or more (one per op-amp current, source row or
//! resistive node) stalled its QR iteration, while the reduced matrix
//! holds only the unknowns the capacitors and op-amp poles act on
//! (measured on 420 builds of the fixture designs with GBW from 1 to
//! 10 MHz: no failure, and agreement with the circuit module's roots to
//! 4e-5 relative wherever that one converged).
//!
//! A group of nodes that only capacitors join to the rest of the circuit
//! (no resistor, inductor, source or op-amp output leads from it to
//! ground) and that no op-amp input watches keeps its total charge: that
//! is an exact natural frequency at s = 0 which no source excites and no
//! output sees (the passive ideal of an elliptic highpass has one between
//! its series capacitors). Such charge modes are counted from the
//! topology and set aside, one root nearest the origin each; every other
//! root decides.
//!
//! A circuit is called stable when every other natural frequency lies
//! strictly inside the left half plane by a relative margin:
//! Re(s) < -margin |s|. The margin keeps a root that rounding has moved
//! off the imaginary axis (a lossless resonance) from passing as stable.

use nalgebra::{DMatrix, Schur};
use num_complex::Complex64;

use super::error::ActiveError;
use crate::circuit::{AcSystem, CircuitError, Element, Netlist, OpAmpModel, Terminal};

/// Relative margin of [`StabilityVerdict::stable`]. The roots come from a
/// shifted eigenvalue problem accurate to about 1e-10 of |s| on the
/// circuit module's closed-form checks; 1e-9 sits above that noise and far
/// below the damping of any pole of a realizable filter (a pole Q of 1e4
/// has Re(s) = -5e-5 |s|).
pub const STABILITY_MARGIN: f64 = 1e-9;

/// Eigenvalues of the reduced matrix below this fraction of the largest
/// count as zero (roots at infinity), as in the circuit module, whose
/// measurements put zero eigenvalues at most 4e-15 of the largest and
/// finite ones above 1.7e-6.
const ZERO_EIGENVALUE: f64 = 1e-12;

/// QR iterations allowed per unknown of the reduced matrix; the shifted
/// iteration needs two or three per eigenvalue, so 200 only stops a
/// runaway (as in the circuit module).
const SCHUR_SWEEPS: usize = 200;

/// Shifts sigma tried in turn, as multiples of |G| / |C| of the network
/// scaled to a mean resistance of 1 ohm (where |G| / |C| sits near the
/// filter's band, the capacitors dominating C); the first that converges
/// is used. The shift maps every root s to the eigenvalue 1/(sigma - s),
/// so roots far above sigma shrink towards the zero eigenvalues, and a
/// shift amid the filter's poles stalled the QR iteration (measured on
/// 210 builds of the fixture designs, GBW 1 to 7 MHz: 7 % failed at
/// |G|/|C|, none at 1e-2 of it or below). Fast roots stay well inside the
/// ZERO_EIGENVALUE range: at 1e-4 of the band scale a root at 1e9 rad/s
/// (GBW 100 MHz and more) is still 1e-10 of the largest eigenvalue, even
/// with a root at 0.
const SHIFT_FACTORS: [f64; 6] = [1e-2, 1e-3, 1e-1, 1e-4, 1.0, 10.0];

/// Whether a circuit is stable, and its rightmost natural frequency.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct StabilityVerdict {
    /// Every natural frequency but the charge modes has
    /// Re(s) < -[`STABILITY_MARGIN`] |s|.
    pub stable: bool,
    /// The natural frequency with the largest real part, charge modes
    /// aside, rad/s, or `None` for a circuit without other dynamics.
    pub rightmost: Option<Complex64>,
    /// How many finite natural frequencies the circuit has, charge modes
    /// included.
    pub count: usize,
    /// How many of them are charge modes (s = 0, see the module
    /// documentation), set aside from the verdict.
    pub charge_modes: usize,
}

/// The stability verdict of `netlist` with its own op-amp models.
pub fn is_stable(netlist: &Netlist) -> Result<StabilityVerdict, ActiveError> {
    netlist.validate()?;
    let scaled = impedance_scaled(netlist, 1.0 / mean_resistance(netlist));
    let system = AcSystem::new(&scaled)?;
    let mut roots = SHIFT_FACTORS
        .iter()
        .find_map(|&factor| reduced_roots(&system, factor))
        .ok_or(CircuitError::NoConvergence {
            what: "natural frequencies at every shift",
        })?;
    let count = roots.len();
    let charge_modes = charge_modes(netlist).min(count);
    roots.sort_by(|a, b| a.norm().total_cmp(&b.norm()));
    let mut deciding = roots.split_off(charge_modes);
    deciding.sort_by(|a, b| b.re.total_cmp(&a.re));
    Ok(StabilityVerdict {
        stable: deciding.iter().all(|s| s.re < -STABILITY_MARGIN * s.norm()),
        rightmost: deciding.first().copied(),
        count,
        charge_modes,
    })
}

/// The roots of det(G + sC) from the eigenvalues of the reduced matrix
/// N = C[R, Q] (G + sigma C)^-1[Q, R], R and Q the rows and columns where
/// C has entries, sigma = `factor` |G| / |C|; `None` if the shift is
/// singular or the eigenvalue iteration does not converge.
///
/// With K = G + sigma C, G + sC = K (I + (s - sigma) K^-1 C), and
/// K^-1 C = (K^-1 E_R)(C[R, Q] E_Q^T) has the nonzero eigenvalues of the
/// product taken the other way round, N: each eigenvalue mu != 0 gives
/// s = sigma - 1/mu (the shift-and-invert relation of
/// [`AcSystem::natural_frequencies`], on |R| unknowns instead of all).
fn reduced_roots(system: &AcSystem, factor: f64) -> Option<Vec<Complex64>> {
    let (g, c) = (system.g(), system.c());
    let rows: Vec<usize> = (0..c.nrows())
        .filter(|&i| c.row(i).iter().any(|&x| x != 0.0))
        .collect();
    let cols: Vec<usize> = (0..c.ncols())
        .filter(|&j| c.column(j).iter().any(|&x| x != 0.0))
        .collect();
    if rows.is_empty() {
        return Some(Vec::new());
    }
    let sigma = factor * (g.norm() / c.norm()).max(f64::MIN_POSITIVE);
    let mut picks = DMatrix::zeros(c.nrows(), rows.len());
    for (column, &row) in rows.iter().enumerate() {
        picks[(row, column)] = 1.0;
    }
    let solved = (g + c * sigma).lu().solve(&picks)?;
    let n = c.select_rows(&rows).select_columns(&cols) * solved.select_rows(&cols);
    let sweeps = SCHUR_SWEEPS * n.nrows();
    let mu = Schur::try_new(n, f64::EPSILON, sweeps)?.complex_eigenvalues();
    let largest = mu.iter().map(|z| z.norm()).fold(0.0, f64::max);
    Some(
        mu.iter()
            .filter(|z| z.norm() > ZERO_EIGENVALUE * largest)
            .map(|z| sigma - 1.0 / z)
            .collect(),
    )
}

/// Nodes merged into groups; each group is named by its lowest node, so
/// ground (node 0) always names its own.
struct Groups(Vec<usize>);

impl Groups {
    fn new(nodes: usize) -> Groups {
        Groups((0..nodes).collect())
    }

    fn root(&self, mut n: usize) -> usize {
        while self.0[n] != n {
            n = self.0[n];
        }
        n
    }

    fn join(&mut self, a: usize, b: usize) {
        let (ra, rb) = (self.root(a), self.root(b));
        self.0[ra.max(rb)] = ra.min(rb);
    }
}

/// The charge modes: groups of nodes joined by resistors, inductors and
/// sources with no such path (nor an op-amp output) to ground, touched by
/// a capacitor and by no op-amp input.
fn charge_modes(netlist: &Netlist) -> usize {
    let mut groups = Groups::new(netlist.nodes.len());
    for element in &netlist.elements {
        match *element {
            Element::Resistor { a, b, .. } | Element::Inductor { a, b, .. } => groups.join(a, b),
            Element::VoltageSource { pos, neg, .. } => groups.join(pos, neg),
            Element::OpAmp { out, .. } => groups.join(out, 0),
            Element::Capacitor { .. } => {}
        }
    }
    let mut capacitive = vec![false; netlist.nodes.len()];
    let mut watched = vec![false; netlist.nodes.len()];
    for element in &netlist.elements {
        for (node, role) in element.terminals() {
            let group = groups.root(node);
            match (element, role) {
                (Element::Capacitor { .. }, _) => capacitive[group] = true,
                (_, Terminal::Input) => watched[group] = true,
                _ => {}
            }
        }
    }
    (1..netlist.nodes.len())
        .filter(|&n| groups.root(n) == n && capacitive[n] && !watched[n])
        .count()
}

/// The geometric mean of the resistances, ohm (1 without any).
fn mean_resistance(netlist: &Netlist) -> f64 {
    let logs: Vec<f64> = netlist
        .elements
        .iter()
        .filter_map(|e| match e {
            Element::Resistor { ohm, .. } => Some(ohm.ln()),
            _ => None,
        })
        .collect();
    match logs.len() {
        0 => 1.0,
        n => (logs.iter().sum::<f64>() / n as f64).exp(),
    }
}

/// Every impedance times `beta` (R, L and op-amp output resistances up,
/// capacitances down), which leaves every natural frequency unchanged.
fn impedance_scaled(netlist: &Netlist, beta: f64) -> Netlist {
    let mut scaled = netlist.clone();
    for element in &mut scaled.elements {
        match element {
            Element::Resistor { ohm: v, .. } | Element::Inductor { henry: v, .. } => *v *= beta,
            Element::Capacitor { farad, .. } => *farad /= beta,
            Element::OpAmp {
                model:
                    OpAmpModel::SinglePole { output_ohm, .. } | OpAmpModel::TwoPole { output_ohm, .. },
                ..
            } => *output_ohm *= beta,
            Element::OpAmp { .. } | Element::VoltageSource { .. } => {}
        }
    }
    scaled
}

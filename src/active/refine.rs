//! Measuring an active network against the passive ideal, and the
//! numerical refinement of the converters' free values.
//!
//! The refinement moves two numbers shared by every converter of a build:
//! the balance point (a factor on the balance frequency, so every loop
//! capacitor changes while the trim element keeps the simulated value) and
//! a common correction on every trim element (pre-distorting the ideal
//! value against the op-amps' value error, about 4 w/wt). It minimizes the
//! largest passband deviation in dB with the Nelder-Mead simplex method
//! (Nelder and Mead 1965, The Computer Journal 7, "A simplex method for
//! function minimization") on their logarithms, which handles the
//! non-smooth minimax cost without derivatives.

use std::cell::RefCell;

use num_complex::Complex64;

use super::error::ActiveError;
use crate::circuit::{band_grid, AcSystem, CircuitError, Netlist, SparseAc};

/// Frequencies per passband at which deviations are measured. The
/// largest deviation sits at an edge or on a ripple peak; against 2000
/// points per band, 60 found it to within 4 % (the worst of 18 fixture
/// designs at GBW 1 MHz, a 6th-order Chebyshev highpass; 16 agreed to
/// 0.02 %).
pub const PASSBAND_POINTS: usize = 60;

/// Cost evaluations allowed to the simplex. The 36 refinements of
/// tests/active.rs (18 designs, GBW 1 and 10 MHz) needed 22 at the median
/// and 71 at most to meet the tolerance below, but for two whose cost
/// stays flat; the cap bounds their run time.
const SIMPLEX_EVALUATIONS: usize = 80;

/// The simplex stops when its costs agree within this, dB: a tenth of the
/// 0.001 dB the deviations are reported to.
const SIMPLEX_COST_TOL_DB: f64 = 1e-4;

/// Initial simplex steps on (ln balance factor, ln correction): the
/// balance point is a broad optimum (the loss cancels at any wb; only the
/// value error's slope across the band moves), so a step of a factor
/// e^0.2 = 1.22; the correction a narrow one, the op-amp value error
/// being 4e-3 at GBW/f = 1000 (measured, gic.rs), which a step of 0.005
/// spans.
const SIMPLEX_STEPS: [f64; 2] = [0.2, 0.005];

/// V(out)/V(in) of a netlist with nodes `in` and `out` at each frequency.
pub(crate) fn transfer(netlist: &Netlist, freqs_hz: &[f64]) -> Result<Vec<Complex64>, ActiveError> {
    let node = |name: &str| {
        netlist
            .node_index(name)
            .ok_or_else(|| ActiveError::Contract {
                problem: format!("no node named {name:?}"),
            })
    };
    let (out, inp) = (node("out")?, node("in")?);
    Ok(AcSystem::new(netlist)?.sweep(freqs_hz, out, inp)?.h)
}

/// The largest |20 log10 |H / H_reference|| over the points.
pub(crate) fn largest_db(reference: &[Complex64], h: &[Complex64]) -> f64 {
    reference
        .iter()
        .zip(h)
        .map(|(r, h)| (20.0 * (h / r).norm().log10()).abs())
        .fold(0.0, f64::max)
}

/// The largest deviation in dB of `active` from `reference` at the given
/// frequencies (both netlists drive node `in` and are read at `out`).
pub fn deviation_db(
    reference: &Netlist,
    active: &Netlist,
    freqs_hz: &[f64],
) -> Result<f64, ActiveError> {
    Meter::new(reference, freqs_hz.to_vec())?.deviation(active)
}

/// A refilled solver whose sweep sends more than one point in this many
/// to the dense path is built again on the values at hand (see
/// [`Meter::deviation`]).
const REORDER_FRACTION: usize = 50;

/// A reference network's response on a grid, to measure networks
/// against.
///
/// The refinement, the gain-bandwidth search and the parts stage measure
/// many networks of one topology, so the meter keeps a sparse solver
/// (pivot order worked out once, see [`SparseAc`]) and refills it with
/// each network's values; a network it cannot take (another topology)
/// gets a new one, and the dense solver answers when none can be built.
/// On a 36-op-amp bandpass at 1 MHz the dense sweeps made a refinement
/// and its search take 9.6 s; the four dense measurements of the parts
/// stage took 0.8 s of a 3.6 s `bom` of a 12th-order elliptic bandstop
/// (255 unknowns).
#[derive(Debug)]
pub struct Meter {
    grid: Vec<f64>,
    reference: Vec<Complex64>,
    sparse: RefCell<Option<SparseAc>>,
}

impl Meter {
    /// The meter of `reference` (nodes `in` and `out`) on `grid_hz`.
    pub fn new(reference: &Netlist, grid_hz: Vec<f64>) -> Result<Meter, ActiveError> {
        Ok(Meter {
            reference: transfer(reference, &grid_hz)?,
            grid: grid_hz,
            sparse: RefCell::new(None),
        })
    }

    /// The frequencies measured, Hz.
    pub fn grid(&self) -> &[f64] {
        &self.grid
    }

    /// The largest deviation of `netlist` from the reference over the
    /// grid, |dB|.
    pub fn deviation(&self, netlist: &Netlist) -> Result<f64, ActiveError> {
        let (Some(&low_hz), Some(&high_hz)) = (
            self.grid.iter().min_by(|a, b| a.total_cmp(b)),
            self.grid.iter().max_by(|a, b| a.total_cmp(b)),
        ) else {
            return Ok(0.0);
        };
        let system = AcSystem::new(netlist)?;
        let (out, inp) = (netlist.require_node("out")?, netlist.require_node("in")?);
        let mut cached = self.sparse.borrow_mut();
        let refilled = cached.as_mut().is_some_and(|s| s.refill(&system).is_ok());
        if !refilled {
            *cached = SparseAc::new(&system, low_hz, high_hz).ok();
        }
        let h = match cached.as_mut() {
            Some(sparse) => {
                let before = sparse.fallbacks();
                let h = sparse.sweep(&self.grid, out, inp)?.h;
                // Orders chosen on the first network can fail the guard on
                // values the refinement has moved far from it (on a
                // 25th-order bandstop, 15 of 180 points of most sweeps went
                // to the dense path, a quarter of its `design` run): choose
                // them again on these values, for the networks to come.
                let failed = sparse.fallbacks() - before;
                if refilled && failed * REORDER_FRACTION > self.grid.len() {
                    *cached = SparseAc::new(&system, low_hz, high_hz).ok();
                }
                h
            }
            None => transfer(netlist, &self.grid)?,
        };
        Ok(largest_db(&self.reference, &h))
    }
}

/// [`PASSBAND_POINTS`] log-spaced frequencies in each band, after checking
/// each band is 0 < low < high.
pub(crate) fn passband_grid(bands: &[[f64; 2]]) -> Result<Vec<f64>, ActiveError> {
    band_grid(bands, PASSBAND_POINTS).map_err(|e| match e {
        CircuitError::BadGrid { from_hz, to_hz, .. } => ActiveError::BadPassband {
            low_hz: from_hz,
            high_hz: to_hz,
        },
        other => ActiveError::Circuit(other),
    })
}

/// Minimizes `cost` over two parameters from `start` with the Nelder-Mead
/// simplex (reflection 1, expansion 2, contraction 1/2, shrink 1/2: the
/// standard coefficients of Nelder and Mead 1965). Returns the best point
/// and its cost.
pub(crate) fn nelder_mead(
    mut cost: impl FnMut([f64; 2]) -> Result<f64, ActiveError>,
    start: [f64; 2],
) -> Result<([f64; 2], f64), ActiveError> {
    let mut simplex = Vec::with_capacity(3);
    for k in 0..3 {
        let mut x = start;
        if k > 0 {
            x[k - 1] += SIMPLEX_STEPS[k - 1];
        }
        simplex.push((x, cost(x)?));
    }
    let mut evaluations = 3;
    let along = |from: [f64; 2], to: [f64; 2], t: f64| {
        [
            from[0] + t * (to[0] - from[0]),
            from[1] + t * (to[1] - from[1]),
        ]
    };
    while evaluations < SIMPLEX_EVALUATIONS {
        simplex.sort_by(|a, b| a.1.total_cmp(&b.1));
        let (best, worst) = (simplex[0], simplex[2]);
        if worst.1 - best.1 < SIMPLEX_COST_TOL_DB {
            break;
        }
        let centroid = along(simplex[0].0, simplex[1].0, 0.5);
        let reflected = along(centroid, worst.0, -1.0);
        let fr = cost(reflected)?;
        evaluations += 1;
        if fr < best.1 {
            let expanded = along(centroid, worst.0, -2.0);
            let fe = cost(expanded)?;
            evaluations += 1;
            simplex[2] = if fe < fr {
                (expanded, fe)
            } else {
                (reflected, fr)
            };
        } else if fr < simplex[1].1 {
            simplex[2] = (reflected, fr);
        } else {
            let contracted = along(centroid, worst.0, 0.5);
            let fc = cost(contracted)?;
            evaluations += 1;
            if fc < worst.1 {
                simplex[2] = (contracted, fc);
            } else {
                for vertex in &mut simplex[1..] {
                    let x = along(best.0, vertex.0, 0.5);
                    *vertex = (x, cost(x)?);
                }
                evaluations += 2;
            }
        }
    }
    simplex.sort_by(|a, b| a.1.total_cmp(&b.1));
    Ok(simplex[0])
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The simplex finds the minimum of a shifted quadratic bowl (closed
    /// form: the shift) to well within its cost tolerance.
    #[test]
    fn simplex_finds_the_bottom_of_a_bowl() {
        let bowl = |x: [f64; 2]| Ok((x[0] - 0.3).powi(2) + 50.0 * (x[1] + 0.01).powi(2));
        let (x, f) = nelder_mead(bowl, [0.0, 0.0]).unwrap();
        assert!(f < SIMPLEX_COST_TOL_DB, "cost {f} at {x:?}");
        assert!(
            (x[0] - 0.3).abs() < 0.02 && (x[1] + 0.01).abs() < 0.003,
            "{x:?}"
        );
    }
}

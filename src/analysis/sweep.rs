//! The transfer sweep of a netlist that follows the project's contract
//! (the source drives node `in`, the output is node `out`): gain, phase
//! and, if asked, the exact group delay at every frequency of a grid, as
//! plain data, through the fastest exact path.
//!
//! The path: [`SparseAc`], its pivot order chosen over the grid's span;
//! its run-time guard sends any point it cannot solve accurately to the
//! dense LU itself. Where no sparse solver can be built for that span,
//! every point goes to the dense LU of [`AcSystem`] (through
//! [`DenseDelay`] when the delay is asked for, the same factorization).
//! A long grid is split into one contiguous part per rayon thread, each
//! solved by its own copy of the sparse solver; the result does not
//! depend on the split. The dense path is the oracle: `tests/sweep.rs`
//! checks this one against it on the demo designs.
//!
//! Every value is finite:
//! - gain: 20 log10 |H|; where H is exactly zero, [`ZERO_GAIN_DB`];
//! - phase: the convention of [`crate::circuit::Response::phase_deg`]
//!   (unwrapped, the first point in (-180, 180]); where H is exactly
//!   zero, whatever the unwrapping makes of arg 0;
//! - group delay: exact up to rounding, and at an exact zero of H the
//!   limit of the delay on either side (finite for a zero on the
//!   j omega axis; see [`DenseDelay`]).

use std::f64::consts::TAU;

use num_complex::Complex64;
use rayon::prelude::*;

use super::AnalysisError;
use crate::circuit::{AcSystem, DenseDelay, Netlist, SparseAc};

/// The gain given where H is exactly zero (minus infinity in dB): that of
/// the smallest positive double, 2^-1074, so below the gain of every
/// non-zero H a double can hold, and finite for files and plots. Its
/// value is checked against 20 log10(2^-1074) by a unit test below.
pub const ZERO_GAIN_DB: f64 = -6_466.124_306_862_316;

/// The response of a netlist over a grid; one entry per frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct Trace {
    /// 20 log10 |V(out)/V(in)|, dB ([`ZERO_GAIN_DB`] where it is zero).
    pub gain_db: Vec<f64>,
    /// Unwrapped phase of V(out)/V(in), degrees (see
    /// [`crate::circuit::Response::phase_deg`]).
    pub phase_deg: Vec<f64>,
    /// Group delay -d arg H / d omega, seconds, when asked for.
    pub group_delay_s: Option<Vec<f64>>,
}

/// The sweep of `netlist` (nodes `in` and `out`) over `freqs_hz`, which
/// must be finite, at least 0 and strictly ascending (an empty grid gives
/// an empty trace); with `with_delay` also the exact group delay. See the
/// module documentation for the path and the values at exact zeros.
/// Errors: a bad grid, a netlist without `in` or `out` or that cannot be
/// solved at a grid point, and, with the delay, an output that vanishes
/// identically (no delay exists).
pub fn trace(
    netlist: &Netlist,
    freqs_hz: &[f64],
    with_delay: bool,
) -> Result<Trace, AnalysisError> {
    let tracer = Tracer::new(netlist, freqs_hz, with_delay)?;
    let n = freqs_hz.len();
    // The output columns, filled in place. A zeroed allocation is mapped
    // lazily, so the delay column costs nothing when it is not asked for.
    let (mut gain_db, mut phase_deg, mut delay_s) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    let threads = rayon::current_num_threads();
    let part = if threads > 1 && n >= PARALLEL_POINTS {
        n.div_ceil(threads)
    } else {
        n.max(1)
    };
    let parts: Vec<Result<(), AnalysisError>> = freqs_hz
        .par_chunks(part)
        .zip(gain_db.par_chunks_mut(part))
        .zip(phase_deg.par_chunks_mut(part))
        .zip(delay_s.par_chunks_mut(part))
        .map_init(
            || tracer.clone(),
            |tracer, (((freqs, gain), arg), delay)| tracer.solve(freqs, gain, arg, delay),
        )
        .collect();
    // In grid order, so the error reported is that of the lowest failing
    // frequency whatever the thread count.
    parts.into_iter().collect::<Result<(), _>>()?;
    unwrap_deg(&mut None, &mut phase_deg);
    Ok(Trace {
        gain_db,
        phase_deg,
        group_delay_s: with_delay.then_some(delay_s),
    })
}

/// The solver of one netlist over one grid, for a trace made part by
/// part ([`trace`] is one over the whole grid, split over rayon's
/// threads): each copy solves any run of the grid, and the phase of
/// consecutive runs is unwrapped in order with [`unwrap_deg`]. Cloning
/// copies the solver (a few tens of kilobytes).
#[derive(Debug, Clone)]
pub struct Tracer {
    solver: Solver,
    /// Nodes `out` and `in`.
    nodes: [usize; 2],
    with_delay: bool,
    /// H and the delay of one pass, reused.
    h: Vec<Complex64>,
    delay: Vec<f64>,
}

/// The sparse solver, or the dense LU where none could be built.
#[derive(Debug, Clone)]
enum Solver {
    Sparse(Box<SparseAc>),
    Dense(Box<(AcSystem, DenseDelay)>),
}

impl Tracer {
    /// The solver of `netlist` (nodes `in` and `out`) for the grid
    /// `freqs_hz` (finite, at least 0, strictly ascending; see [`trace`]
    /// for the path and its errors); with `with_delay` it also gives the
    /// exact group delay.
    pub fn new(
        netlist: &Netlist,
        freqs_hz: &[f64],
        with_delay: bool,
    ) -> Result<Tracer, AnalysisError> {
        check_grid(freqs_hz)?;
        let (inp, out) = (netlist.require_node("in")?, netlist.require_node("out")?);
        let system = AcSystem::new(netlist)?;
        // The span of the positive frequencies (the grid ascends, so its
        // last point closes it): a sparse order is chosen on values at
        // frequencies in it, and DC, if in the grid, is solved like any
        // point outside it (the guard decides whether the dense LU takes
        // it).
        let lowest = freqs_hz.iter().copied().find(|&f| f > 0.0);
        let span = lowest.zip(freqs_hz.last().copied());
        let solver = match span.and_then(|(lo, hi)| SparseAc::new(&system, lo, hi).ok()) {
            Some(sparse) => Solver::Sparse(Box::new(sparse)),
            None => {
                let dense = DenseDelay::new(&system);
                Solver::Dense(Box::new((system, dense)))
            }
        };
        Ok(Tracer {
            solver,
            nodes: [out, inp],
            with_delay,
            h: Vec::new(),
            delay: Vec::new(),
        })
    }

    /// Solves the frequencies `freqs_hz` (a run of the grid given to
    /// [`Tracer::new`]) into the rows of the same length: the gain in dB
    /// ([`ZERO_GAIN_DB`] at an exact zero), arg H in radians, not yet
    /// unwrapped, and the group delay in seconds (left untouched when it
    /// was not asked for).
    pub fn solve(
        &mut self,
        freqs_hz: &[f64],
        gain_db: &mut [f64],
        arg_rad: &mut [f64],
        delay_s: &mut [f64],
    ) -> Result<(), AnalysisError> {
        let [out, inp] = self.nodes;
        let with_delay = self.with_delay;
        let mut rows = Rows {
            gain_db,
            arg_rad,
            delay_s,
        };
        match &mut self.solver {
            Solver::Sparse(sparse) => {
                let (h, delay) = (&mut self.h, &mut self.delay);
                for (pass, freqs) in freqs_hz.chunks(PASS_POINTS).enumerate() {
                    let at = pass * PASS_POINTS;
                    if with_delay {
                        sparse.sweep_delay_into(freqs, out, inp, h, delay)?;
                    } else {
                        sparse.sweep_into(freqs, out, inp, h)?;
                    }
                    for (k, &hk) in h.iter().enumerate() {
                        rows.set(at + k, hk, delay.get(k).copied());
                    }
                }
            }
            Solver::Dense(dense) => {
                let (system, dense) = &mut **dense;
                for (k, &f) in freqs_hz.iter().enumerate() {
                    if with_delay {
                        let (h, delay) = dense.transfer_delay(system, f, out, inp)?;
                        rows.set(k, h, Some(delay));
                    } else {
                        rows.set(k, system.transfer(f, out, inp)?, None);
                    }
                }
            }
        }
        Ok(())
    }
}

/// Rows being filled by [`Tracer::solve`].
struct Rows<'a> {
    gain_db: &'a mut [f64],
    arg_rad: &'a mut [f64],
    delay_s: &'a mut [f64],
}

impl Rows<'_> {
    /// Row `k` from H (and the delay, if given).
    fn set(&mut self, k: usize, h: Complex64, delay_s: Option<f64>) {
        self.gain_db[k] = gain_db(h);
        self.arg_rad[k] = h.arg();
        if let Some(d) = delay_s {
            self.delay_s[k] = d;
        }
    }
}

/// Points from which [`trace`] splits its grid into one contiguous part
/// per rayon thread, each solved by its own copy of the solver; below,
/// the calling thread solves them all. A part of 2,048 points takes about
/// half a millisecond, far above the cost of a copy and of rayon's
/// scheduling. Each frequency is solved in its own lane whatever points
/// share its pass, so the result does not depend on the split
/// (`tests/sweep.rs` compares one, two and three threads).
const PARALLEL_POINTS: usize = 4096;

/// Points solved at a time, into buffers reused from one pass to the
/// next, so that only the output columns are fresh memory: on the
/// project's machine memory touched for the first time is dear (measured:
/// a 100,000-point trace took 0.5 us per point while it allocated H and
/// its copies afresh, 0.3 us when they were reused).
const PASS_POINTS: usize = 512;

/// Unwraps a run of phases in place, radians in, degrees out, with the
/// very operations of [`crate::circuit::Response::phase_deg`], so the
/// values are the same doubles (a unit test below compares them bit for
/// bit): the first point of a grid (`last` is `None`) stays in
/// (-180, 180], each later one is shifted by whole turns to within half
/// a turn of its predecessor. `last` carries the unwrapped phase of the
/// previous run, in radians, so consecutive runs unwrap as one.
pub fn unwrap_deg(last: &mut Option<f64>, phase: &mut [f64]) {
    for p in phase.iter_mut() {
        let raw = *p;
        let next = match *last {
            Some(last) => raw + TAU * ((last - raw) / TAU).round(),
            None => raw,
        };
        *last = Some(next);
        *p = next.to_degrees();
    }
}

/// 20 log10 |H|, [`ZERO_GAIN_DB`] at zero. Computed as 10 log10 |H|^2,
/// without the square root and scaling of `hypot`, where |H|^2 is a
/// normal double (|H| between about 1e-154 and 1e154): the two agree to a
/// few units in the last place (within 1e-14 dB on the demos,
/// `tests/sweep.rs`); elsewhere from |H| itself.
fn gain_db(h: Complex64) -> f64 {
    let power = h.norm_sqr();
    if power.is_normal() {
        10.0 * power.log10()
    } else {
        match h.norm() {
            0.0 => ZERO_GAIN_DB,
            m => 20.0 * m.log10(),
        }
    }
}

/// Finite, at least 0, strictly ascending.
fn check_grid(freqs_hz: &[f64]) -> Result<(), AnalysisError> {
    let mut last = None;
    for (index, &f) in freqs_hz.iter().enumerate() {
        let ascending = last.is_none_or(|l| f > l);
        if !(f.is_finite() && f >= 0.0 && ascending) {
            return Err(AnalysisError::Grid { index, freq_hz: f });
        }
        last = Some(f);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zero_gain_is_that_of_the_smallest_double() {
        let want = 20.0 * f64::from_bits(1).log10();
        assert_eq!(ZERO_GAIN_DB, want);
        assert!(ZERO_GAIN_DB < gain_db(Complex64::new(f64::from_bits(1), 0.0)) + 1e-9);
        assert_eq!(gain_db(Complex64::new(0.0, -0.0)), ZERO_GAIN_DB);
        // Through |H|^2 and through |H| where the square under- or
        // overflows: 20 log10 |H| either way.
        for m in [1e-300, 1e-160, 1e-5, 0.5, 1.0, 3.0, 1e160, 1e300] {
            let h = Complex64::from_polar(m, 0.7);
            let want = 20.0 * m.log10();
            let got = gain_db(h);
            assert!(
                (got - want).abs() <= 1e-12 * want.abs().max(1.0),
                "{m}: {got} vs {want}"
            );
        }
    }

    /// The phase is Response::phase_deg's, bit for bit: a response that
    /// winds several turns both ways, with signed zeros and an exact zero.
    #[test]
    fn phase_is_that_of_response_bit_for_bit() {
        let h: Vec<Complex64> = (0..400)
            .map(|i| {
                let t = i as f64 / 17.0;
                Complex64::from_polar(1.0 + t, 3.0 * t.sin() * t - 0.9 * t)
            })
            .chain([
                Complex64::new(0.0, 0.0),
                Complex64::new(-0.0, 0.0),
                Complex64::new(-1.0, -0.0),
                Complex64::new(-1.0, 0.0),
            ])
            .collect();
        let want = crate::circuit::Response {
            freq_hz: vec![0.0; h.len()],
            h: h.clone(),
        }
        .phase_deg();
        let mut got: Vec<f64> = h.iter().map(|z| z.arg()).collect();
        let mut split = got.clone();
        unwrap_deg(&mut None, &mut got);
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&got), bits(&want));
        // In runs, carrying the last phase: the same.
        let mut last = None;
        for run in split.chunks_mut(37) {
            unwrap_deg(&mut last, run);
        }
        assert_eq!(bits(&split), bits(&want));
    }

    #[test]
    fn grids_must_ascend() {
        for (grid, index) in [
            (vec![1.0, 1.0], 1),
            (vec![2.0, 1.0], 1),
            (vec![-1.0], 0),
            (vec![1.0, f64::NAN], 1),
            (vec![0.0, f64::INFINITY], 1),
        ] {
            match check_grid(&grid) {
                Err(AnalysisError::Grid { index: i, .. }) => assert_eq!(i, index, "{grid:?}"),
                other => panic!("{grid:?}: {other:?}"),
            }
        }
        assert!(check_grid(&[]).is_ok() && check_grid(&[0.0, 1e-300, 1.0]).is_ok());
    }
}

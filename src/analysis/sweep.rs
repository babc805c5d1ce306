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
//! depend on the split.
//! The dense path is the oracle: `tests/sweep.rs` checks this one against
//! it on the demo designs.
//!
//! Every value is finite:
//! - gain: 20 log10 |H|; where H is exactly zero, [`ZERO_GAIN_DB`];
//! - phase: [`Response::phase_deg`]'s convention (unwrapped, the first
//!   point in (-180, 180]); where H is exactly zero, whatever the
//!   unwrapping makes of arg 0;
//! - group delay: exact up to rounding, and at an exact zero of H the
//!   limit of the delay on either side (finite for a zero on the
//!   j omega axis; see [`DenseDelay`]).

use num_complex::Complex64;

use super::AnalysisError;
use rayon::prelude::*;

use crate::circuit::{AcSystem, CircuitError, DenseDelay, Netlist, Response, SparseAc};

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
    /// [`Response::phase_deg`]).
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
    check_grid(freqs_hz)?;
    let (inp, out) = (netlist.require_node("in")?, netlist.require_node("out")?);
    let system = AcSystem::new(netlist)?;
    // The span of the positive frequencies (the grid ascends, so its
    // last point closes it): a sparse order is chosen on values at
    // frequencies in it, and DC, if in the grid, is solved like any point
    // outside it (the guard decides whether the dense LU takes it).
    let lowest = freqs_hz.iter().copied().find(|&f| f > 0.0);
    let span = lowest.zip(freqs_hz.last().copied());
    let (h, delay) = match span.and_then(|(lo, hi)| SparseAc::new(&system, lo, hi).ok()) {
        Some(sparse) => sparse_sweep(&sparse, freqs_hz, [out, inp], with_delay)?,
        None => dense_sweep(system, freqs_hz, [out, inp], with_delay)?,
    };
    let response = Response {
        freq_hz: freqs_hz.to_vec(),
        h,
    };
    Ok(Trace {
        gain_db: gain_db(&response.h),
        phase_deg: response.phase_deg(),
        group_delay_s: with_delay.then_some(delay),
    })
}

/// Points from which a sparse sweep is split into one contiguous part per
/// rayon thread, each solved by its own copy of the solver (a clone of a
/// few tens of kilobytes); below, the calling thread solves them all. A
/// part of 2,048 points takes about half a millisecond, far above the cost
/// of a clone and of rayon's scheduling. Each frequency is solved in its
/// own lane whatever points share its pass, so the result does not depend
/// on the split (`tests/sweep.rs` compares one, two and three threads).
const PARALLEL_POINTS: usize = 4096;

/// H at every frequency, and the group delay if asked (else empty).
type Solved = (Vec<Complex64>, Vec<f64>);

/// H (and with `with_delay` the delay) at every frequency through
/// `sparse`, in parallel parts on long grids.
fn sparse_sweep(
    sparse: &SparseAc,
    freqs_hz: &[f64],
    [out, inp]: [usize; 2],
    with_delay: bool,
) -> Result<Solved, CircuitError> {
    let n = freqs_hz.len();
    let threads = rayon::current_num_threads();
    let part = if threads > 1 && n >= PARALLEL_POINTS {
        n.div_ceil(threads)
    } else {
        n.max(1)
    };
    let parts: Vec<Result<Solved, CircuitError>> = freqs_hz
        .par_chunks(part)
        .map_init(
            || sparse.clone(),
            |sparse, freqs| {
                let (mut h, mut delay) = (Vec::with_capacity(freqs.len()), Vec::new());
                if with_delay {
                    sparse.sweep_delay_into(freqs, out, inp, &mut h, &mut delay)?;
                } else {
                    sparse.sweep_into(freqs, out, inp, &mut h)?;
                }
                Ok((h, delay))
            },
        )
        .collect();
    let mut h = Vec::with_capacity(n);
    let mut delay = Vec::with_capacity(if with_delay { n } else { 0 });
    // In grid order, so the error reported is that of the lowest failing
    // frequency whatever the thread count.
    for part in parts {
        let (ph, pd) = part?;
        h.extend_from_slice(&ph);
        delay.extend_from_slice(&pd);
    }
    Ok((h, delay))
}

/// H (and the delay) at every frequency by the dense LU of `system`.
fn dense_sweep(
    mut system: AcSystem,
    freqs_hz: &[f64],
    [out, inp]: [usize; 2],
    with_delay: bool,
) -> Result<Solved, CircuitError> {
    let mut h = Vec::with_capacity(freqs_hz.len());
    let mut delay = Vec::new();
    if with_delay {
        let mut dense = DenseDelay::new(&system);
        for &f in freqs_hz {
            let (hf, df) = dense.transfer_delay(&system, f, out, inp)?;
            h.push(hf);
            delay.push(df);
        }
    } else {
        for &f in freqs_hz {
            h.push(system.transfer(f, out, inp)?);
        }
    }
    Ok((h, delay))
}

/// 20 log10 |H| of each value, [`ZERO_GAIN_DB`] at zero. Computed as
/// 10 log10 |H|^2, without the square root and scaling of `hypot`, where
/// |H|^2 is a normal double (|H| between about 1e-154 and 1e154): the
/// two agree to a few units in the last place (within 1e-14 dB on the
/// demos, `tests/sweep.rs`); elsewhere from |H| itself.
fn gain_db(h: &[Complex64]) -> Vec<f64> {
    h.iter()
        .map(|h| {
            let power = h.norm_sqr();
            if power.is_normal() {
                10.0 * power.log10()
            } else {
                match h.norm() {
                    0.0 => ZERO_GAIN_DB,
                    m => 20.0 * m.log10(),
                }
            }
        })
        .collect()
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
        assert!(ZERO_GAIN_DB < gain_db(&[Complex64::new(f64::from_bits(1), 0.0)])[0] + 1e-9);
        assert_eq!(gain_db(&[Complex64::new(0.0, -0.0)]), vec![ZERO_GAIN_DB]);
        // Through |H|^2 and through |H| where the square under- or
        // overflows: 20 log10 |H| either way.
        for m in [1e-300, 1e-160, 1e-5, 0.5, 1.0, 3.0, 1e160, 1e300] {
            let h = Complex64::from_polar(m, 0.7);
            let want = 20.0 * m.log10();
            let got = gain_db(&[h])[0];
            assert!(
                (got - want).abs() <= 1e-12 * want.abs().max(1.0),
                "{m}: {got} vs {want}"
            );
        }
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

//! The response to a step at the input: overshoot, rise time and the
//! settling times an anti-alias filter before a sampling converter is
//! chosen by, computed from the circuit's modes (its natural frequencies
//! and residues, [`crate::circuit::Modes`]), so every figure is exact up
//! to rounding and to the bisection that places it.
//!
//! The settling band is a fraction of the step's reference level: the
//! final value where the filter passes DC (lowpass, bandstop), else the
//! passband level (highpass, bandpass, whose step response returns to
//! zero). Settling to half an LSB of an N-bit converter is settling to
//! 2^-(N+1) of that level (common practice).

use num_complex::Complex64;

use crate::circuit::{Modes, Netlist};

use super::AnalysisError;

/// Samples of the search for overshoot, crossings and the last exit from
/// a settling band, uniform over the time that band needs (each band its
/// own window): with a filter's own periods at least a twentieth of that
/// time, about 1,000 samples per period, and each crossing then placed by
/// bisection. (One window for all, the finest band's, made the overshoot
/// of a Bessel lowpass's build on parts read 0.007 % instead of 0.83 %
/// with `[adc] bits = 24`: found by a trial as a new user.)
pub const STEP_SEARCH_SAMPLES: usize = 20_000;

/// Bisection steps placing a crossing between two samples: 2^-50 of the
/// sample spacing.
const BISECTIONS: usize = 50;

/// A settling band is placed only where it is at least this many times
/// the modes' accuracy (`circuit::Modes::accuracy`, relative to the
/// largest gain, which the reference level is close to): the response
/// is then known to a tenth of the band.
pub const RESOLVED_BY_ACCURACY: f64 = 10.0;

/// Settling fractions every step response reports: 1 %, 0.1 %, 0.01 %.
pub const SETTLING_FRACTIONS: [f64; 3] = [1e-2, 1e-3, 1e-4];

/// Below this fraction of the passband level a final value counts as
/// zero (a highpass or bandpass: its step returns to nothing).
const ZERO_FINAL: f64 = 1e-6;

/// The time a step response takes to stay within a band.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Settling {
    /// Half-width of the band, as a fraction of the reference level.
    pub fraction: f64,
    /// From the step until the response last leaves the band, s (0 when
    /// it never does); `None` for a band finer than
    /// [`RESOLVED_BY_ACCURACY`] times the accuracy of the modes, which
    /// cannot place it.
    pub time_s: Option<f64>,
}

/// What a step response shows.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct StepFigures {
    /// The response's final value for a 1 V step, V (exactly 0 where it
    /// is below a millionth of the passband level: a filter that blocks
    /// DC).
    pub final_v: f64,
    /// The level the settling bands are fractions of, V: |final value|,
    /// or the passband level where the final value is zero.
    pub reference_v: f64,
    /// Peak above the final value, percent of it; `None` where the final
    /// value is zero.
    pub overshoot_pct: Option<f64>,
    /// From 10 % to 90 % of the final value, s; `None` where it is zero.
    pub rise_time_s: Option<f64>,
    /// Settling to each of [`SETTLING_FRACTIONS`], then to half an LSB
    /// when a converter resolution is given.
    pub settling: Vec<Settling>,
}

/// The modes of `netlist`'s V(out)/V(in), from its natural frequencies
/// `roots` (rad/s), for its step response.
pub fn step_modes(netlist: &Netlist, roots: &[Complex64]) -> Result<Modes, AnalysisError> {
    let (inp, out) = (netlist.require_node("in")?, netlist.require_node("out")?);
    Ok(crate::circuit::AcSystem::new(netlist)?.modes(roots, out, inp)?)
}

/// The first time in `lo..hi` where `f` changes sign from `f(lo)`, by
/// bisection (f(lo) and f(hi) differ in sign).
fn crossing(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    let below = f(lo) < 0.0;
    for _ in 0..BISECTIONS {
        let mid = 0.5 * (lo + hi);
        if (f(mid) < 0.0) == below {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// The time after which the response provably stays within `band` (V)
/// of its final value: where the modes' tail bound falls to it, found by
/// doubling and bisection; 0 if it starts there.
fn settled_bound(modes: &Modes, band: f64) -> f64 {
    if modes.tail_bound(0.0) <= band {
        return 0.0;
    }
    let slowest = modes
        .terms
        .iter()
        .filter(|m| m.pole.re < 0.0)
        .map(|m| -m.pole.re)
        .fold(f64::INFINITY, f64::min);
    let mut hi = if slowest.is_finite() {
        1.0 / slowest
    } else {
        1.0
    };
    let mut guard = 0;
    while modes.tail_bound(hi) > band && guard < 200 {
        hi *= 2.0;
        guard += 1;
    }
    crossing(|t| modes.tail_bound(t) - band, 0.0, hi)
}

/// The figures of a step response by its modes; `passband_v` is the
/// passband level (the reference where the final value is zero), `bits`
/// a converter resolution for the half-LSB settling time.
pub fn step_figures(modes: &Modes, passband_v: f64, bits: Option<u32>) -> StepFigures {
    let dc = modes.final_value();
    let passes_dc = dc.abs() > ZERO_FINAL * passband_v.abs();
    // A highpass or bandpass blocks DC: what is left is rounding.
    let final_v = if passes_dc { dc } else { 0.0 };
    let reference_v = if passes_dc {
        final_v.abs()
    } else {
        passband_v.abs()
    };
    let fractions: Vec<f64> = SETTLING_FRACTIONS
        .iter()
        .copied()
        .chain(bits.map(|n| 0.5f64.powi(n as i32 + 1)))
        .collect();
    let resolved = |fraction: f64| fraction >= RESOLVED_BY_ACCURACY * modes.accuracy;
    // Each band is searched on its own window, from the step to where the
    // modes' tail bound says it is settled for good, so a fine band's long
    // window (half an LSB of many bits) does not coarsen the samples of the
    // others; overshoot and rise time are read on the 0.1 % window, which
    // holds every excursion larger than that.
    let window = |band: f64| -> (Vec<f64>, Vec<f64>, f64) {
        let span = settled_bound(modes, band).max(f64::MIN_POSITIVE);
        let dt = span / STEP_SEARCH_SAMPLES as f64;
        let times: Vec<f64> = (0..=STEP_SEARCH_SAMPLES).map(|k| k as f64 * dt).collect();
        let y = modes.step_samples(dt, times.len());
        (times, y, span)
    };
    let settling = fractions
        .iter()
        .map(|&fraction| {
            if !resolved(fraction) {
                return Settling {
                    fraction,
                    time_s: None,
                };
            }
            let band = fraction * reference_v;
            let (times, y, span) = window(band);
            let outside = |t: f64| (modes.step_at(t) - final_v).abs() - band;
            let time_s = match (0..y.len()).rev().find(|&k| (y[k] - final_v).abs() > band) {
                None => Some(0.0),
                Some(k) if k + 1 == y.len() => Some(span),
                Some(k) => Some(crossing(outside, times[k], times[k + 1])),
            };
            Settling { fraction, time_s }
        })
        .collect();
    let (overshoot_pct, rise_time_s) = if passes_dc {
        let (times, y, _) = window(SETTLING_FRACTIONS[1] * reference_v);
        let peak = y
            .iter()
            .map(|v| v * final_v.signum())
            .fold(f64::NEG_INFINITY, f64::max);
        let overshoot = (100.0 * (peak - final_v.abs()) / final_v.abs()).max(0.0);
        let first = |level: f64| {
            let g = |t: f64| modes.step_at(t) * final_v.signum() - level * final_v.abs();
            match (0..y.len()).find(|&k| y[k] * final_v.signum() >= level * final_v.abs()) {
                Some(0) | None => 0.0,
                Some(k) => crossing(g, times[k - 1], times[k]),
            }
        };
        (Some(overshoot), Some(first(0.9) - first(0.1)))
    } else {
        (None, None)
    };
    StepFigures {
        final_v,
        reference_v,
        overshoot_pct,
        rise_time_s,
        settling,
    }
}

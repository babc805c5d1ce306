//! Group-delay spread: the longest less the shortest group delay over the
//! bands a delay specification names. A waveform whose components are all
//! delayed alike keeps its shape, so the spread (not the delay itself) is
//! what a delay specification bounds.
//!
//! Invariants ([`DelayLimit::new`]): at least one band, each finite with
//! 0 <= from < to; a positive finite bound. The grid never holds 0 Hz:
//! a band from DC starts at [`DC_FRACTION`] of its top.

use super::AnalysisError;

/// Points per band, twice over: evenly spaced (the delay of a passband
/// is smooth on the scale of its narrowest pole's bandwidth) and
/// log-spaced (a band from DC holds the active builds' DC-path time
/// constants, which move the delay within a decade or two of the band's
/// bottom). Doubling this moves the spread of tests/families.rs's cases
/// by under 1e-3 of itself (`delay_spread_holds_when_the_grid_doubles`).
pub const DELAY_POINTS: usize = 256;

/// Where a band from DC starts, as a fraction of its top: the solvers
/// take no 0 Hz point, and an all-pole delay departs from its DC value
/// like (w/w_p)^2, a relative 1e-6 here.
pub const DC_FRACTION: f64 = 1e-3;

/// A bound on the group-delay spread over some bands.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct DelayLimit {
    /// The bands, Hz, `[from, to]`.
    pub bands_hz: Vec<[f64; 2]>,
    /// The largest spread allowed, seconds.
    pub max_spread_s: f64,
}

/// How one response's delay stands against a [`DelayLimit`].
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct DelayVerdict {
    /// Whether the spread is within the bound.
    pub meets: bool,
    /// Longest less shortest delay over the bands, seconds.
    pub spread_s: f64,
    /// The bound, seconds.
    pub max_spread_s: f64,
    /// The longest delay, seconds, and where, Hz.
    pub longest_s: f64,
    /// Where the longest delay is, Hz.
    pub longest_at_hz: f64,
    /// The shortest delay, seconds.
    pub shortest_s: f64,
    /// Where the shortest delay is, Hz.
    pub shortest_at_hz: f64,
}

impl DelayLimit {
    /// Checks the bands and bound (see the module doc).
    pub fn new(bands_hz: Vec<[f64; 2]>, max_spread_s: f64) -> Result<DelayLimit, AnalysisError> {
        let bad_band = bands_hz
            .iter()
            .find(|[a, b]| !(a.is_finite() && b.is_finite() && *a >= 0.0 && a < b));
        if bands_hz.is_empty()
            || bad_band.is_some()
            || !(max_spread_s > 0.0 && max_spread_s.is_finite())
        {
            let [from_hz, to_hz] = bad_band.copied().unwrap_or([f64::NAN; 2]);
            return Err(AnalysisError::BadDelayLimit {
                from_hz,
                to_hz,
                max_spread_s,
            });
        }
        Ok(DelayLimit {
            bands_hz,
            max_spread_s,
        })
    }

    /// The frequencies the spread is judged at, Hz, ascending.
    pub fn grid(&self) -> Vec<f64> {
        let mut grid: Vec<f64> = self
            .bands_hz
            .iter()
            .flat_map(|&band| {
                let (a, b) = (judged_from_hz(band), band[1]);
                let step = |i: usize| i as f64 / (DELAY_POINTS - 1) as f64;
                let even = (0..DELAY_POINTS).map(move |i| a + (b - a) * step(i));
                let log = (0..DELAY_POINTS).map(move |i| a * (b / a).powf(step(i)));
                even.chain(log)
            })
            .collect();
        grid.sort_by(f64::total_cmp);
        grid.dedup();
        grid
    }

    /// The verdict of the delays `delay_s` at `freqs_hz` (the points of
    /// [`DelayLimit::grid`], or any grid: the points within the bands
    /// with a finite delay count).
    pub fn verdict(&self, freqs_hz: &[f64], delay_s: &[f64]) -> DelayVerdict {
        let inside = |f: f64| self.bands_hz.iter().any(|&[a, b]| f >= a && f <= b);
        let mut longest = (f64::NEG_INFINITY, f64::NAN);
        let mut shortest = (f64::INFINITY, f64::NAN);
        // A delay that is not finite (a prototype's at the exact centre of
        // a bandstop, where its substitution is infinite) is left out.
        let judged = freqs_hz
            .iter()
            .zip(delay_s)
            .filter(|(f, t)| inside(**f) && t.is_finite());
        for (&f, &t) in judged {
            if t > longest.0 {
                longest = (t, f);
            }
            if t < shortest.0 {
                shortest = (t, f);
            }
        }
        let spread_s = longest.0 - shortest.0;
        DelayVerdict {
            meets: spread_s <= self.max_spread_s,
            spread_s,
            max_spread_s: self.max_spread_s,
            longest_s: longest.0,
            longest_at_hz: longest.1,
            shortest_s: shortest.0,
            shortest_at_hz: shortest.1,
        }
    }
}

/// The lowest frequency a band is judged at, Hz: its bottom, or for a
/// band from DC [`DC_FRACTION`] of its top.
pub fn judged_from_hz([from, to]: [f64; 2]) -> f64 {
    if from == 0.0 {
        to * DC_FRACTION
    } else {
        from
    }
}

//! The impedance level of the ladder's own parts: the one freedom left
//! for the parts that neither a converter nor the FDNR image level moves.
//!
//! A simulated-inductor build keeps the passive ideal's capacitors and
//! its termination resistors as parts (see
//! [`crate::active::kept_elements`]), at the level the terminations set.
//! Multiplying both terminations by k multiplies every impedance of the
//! passive ideal by k (R and L times k, C divided by k: the impedance
//! scaling of `crate::transform`), which leaves every voltage ratio, and
//! so the transfer, unchanged (common practice; tests/level.rs,
//! `free_level_builds_each_design_in_range_with_the_same_response`,
//! measures it). So
//! where the terminations are resistors the designer picks, k is free:
//!
//! - each part fits its range for k in an interval (a capacitor C in
//!   [low, high] for C/high <= k <= C/low, a resistor R for
//!   low/R <= k <= high/R); the factors that fit every part are the
//!   intersection;
//! - inside it, k is taken from a fine scan for the smallest largest
//!   log-distance of a ladder capacitor to its nearest preferred value
//!   (minimax, as the FDNR image level of step 1 in [`super`]): no trim
//!   corrects these capacitors, and the largest of their snapping steps
//!   bounds the passband error they leave. The preferred values repeat
//!   every decade, so equally good factors recur a decade apart; the one
//!   nearest the design file's level is taken;
//! - a range the design file sets is a limit, a default one (the
//!   capacitor range without `parts.capacitor_range`, the resistor range
//!   always) a preference: when no factor meets every range, the limits
//!   are kept and the preferences missed by as little as possible (the
//!   middle of their conflicting bounds, on a log scale), with a warning.

use super::{within, Buying, PartsSnapError, RANGE_SLACK};
use crate::circuit::{Element, Netlist};
use crate::parts::{ImpedanceLevel, PartsChoice, Series};
use std::f64::consts::LN_10;

/// Points per decade of the scan over the factors that fit: a hundred per
/// E192 step (the finest series), so the best point's largest snapping
/// step lies within half a scan step (0.006 %) of the best factor's. A
/// whole number per decade, so a factor and ten times it are both on
/// the grid and score alike.
const SCAN_PER_DECADE: f64 = 19_200.0;

/// Largest difference of two scores (log-distances) that counts as a tie:
/// the rounding of grid points a decade apart, far below any part's
/// tolerance.
const SCORE_TIE: f64 = 1e-9;

/// One part whose value the ladder's impedance level sets.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LadderPart {
    /// Its designator in the passive ideal.
    pub designator: String,
    /// Its value, in `unit` (at the level the record describes).
    pub value: f64,
    /// "F" or "ohm".
    pub unit: &'static str,
    /// The smallest value bought, in `unit`.
    pub low: f64,
    /// The largest value bought, in `unit`.
    pub high: f64,
    /// Whether the design file sets that range (a limit) or it is the
    /// default (a preference).
    pub range_given: bool,
}

impl LadderPart {
    /// The power of the impedance factor k its value goes with: k for a
    /// resistor, 1/k for a capacitor.
    fn exponent(&self) -> f64 {
        if self.unit == "ohm" {
            1.0
        } else {
            -1.0
        }
    }

    /// Its value with every impedance times e^t.
    fn at(&self, t: f64) -> f64 {
        self.value * (self.exponent() * t).exp()
    }

    /// The interval of t = ln k (every impedance times k) that keeps it
    /// in its range.
    fn fits(&self) -> (f64, f64) {
        let e = self.exponent();
        let (a, b) = (
            (self.low / self.value).ln() * e,
            (self.high / self.value).ln() * e,
        );
        (a.min(b), a.max(b))
    }

    /// Whether its value at t lies in its range (within [`RANGE_SLACK`]).
    fn fits_at(&self, t: f64) -> bool {
        within(self.at(t), (self.low, self.high))
    }
}

/// The impedance level of a design's passive ideal and what it does to
/// the ladder's own parts.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LadderLevel {
    /// What the design file asks for.
    pub asked: ImpedanceLevel,
    /// The factor on every impedance of the passive ideal (1: the design
    /// file's terminations).
    pub factor: f64,
    /// The design file's source resistance, ohm.
    pub given_source_ohm: f64,
    /// The design file's load resistance, ohm.
    pub given_load_ohm: f64,
    /// The source resistance of the passive ideal, ohm.
    pub source_ohm: f64,
    /// The load resistance of the passive ideal, ohm.
    pub load_ohm: f64,
    /// The factor that puts every ladder part in its range, as the free
    /// level chooses it; `None` when no factor does.
    pub fitting_factor: Option<f64>,
    /// The ladder's capacitors that become parts, smallest and largest,
    /// at the design file's level, farad (`None`: the build keeps none).
    pub given_capacitors_f: Option<[f64; 2]>,
    /// The same at the level used, farad.
    pub capacitors_f: Option<[f64; 2]>,
    /// How many of the passive ideal's parts the build keeps at its level.
    pub ladder_parts: usize,
    /// The ladder parts outside a default range at the level used (each a
    /// warning), with their values there.
    pub outside_default_range: Vec<LadderPart>,
}

/// Chooses the impedance level of `passive` (at the design file's level)
/// for the parts `kept` that its build keeps (see
/// [`crate::active::kept_elements`]): with [`ImpedanceLevel::Free`] the
/// factor of the module documentation, with [`ImpedanceLevel::Fixed`] 1.
/// `terminations_ohm` are the design file's (source, load).
///
/// Refuses (bad input) a capacitor outside a range the design file sets:
/// at the fixed level naming the terminations that would fit
/// ([`PartsSnapError::LevelOutOfRange`]); when no level fits
/// ([`PartsSnapError::NoLevelFits`]).
pub fn ladder_level(
    passive: &Netlist,
    kept: &[usize],
    terminations_ohm: (f64, f64),
    choice: &PartsChoice,
    asked: ImpedanceLevel,
) -> Result<LadderLevel, PartsSnapError> {
    choice.check()?;
    let parts = ladder_parts(passive, kept, choice);
    let limits = bounds(parts.iter().filter(|p| p.range_given));
    let capacitors: Vec<&LadderPart> = parts.iter().filter(|p| p.unit == "F").collect();
    if limits.0 > limits.1 + RANGE_SLACK {
        let values: Vec<f64> = capacitors.iter().map(|p| p.value).collect();
        let (low_f, high_f) = choice.capacitor_range_f;
        let (min, max) = extent(&values).map_or((f64::NAN, f64::NAN), |[a, b]| (a, b));
        return Err(PartsSnapError::NoLevelFits {
            spread: max / min,
            low_f,
            high_f,
        });
    }
    let all = bounds(parts.iter());
    let fits = all.0 <= all.1 + RANGE_SLACK;
    let best = if fits {
        scan(&capacitors, all, choice.capacitor_series)
    } else {
        let preferences = bounds(parts.iter().filter(|p| !p.range_given));
        clamp_into(0.5 * (preferences.0 + preferences.1), limits)
    };
    let t = match asked {
        ImpedanceLevel::Free => best,
        ImpedanceLevel::Fixed => 0.0,
    };
    let (source, load) = terminations_ohm;
    if let Some(p) = parts.iter().find(|p| p.range_given && !p.fits_at(t)) {
        let k = best.exp();
        return Err(PartsSnapError::LevelOutOfRange {
            element: p.designator.clone(),
            farad: p.value,
            low_f: p.low,
            high_f: p.high,
            given_ohm: [source, load],
            fitting_ohm: [source * k, load * k],
            beyond_resistor_range: parts.iter().any(|p| p.unit == "ohm" && !p.fits_at(best)),
        });
    }
    let factor = t.exp();
    let at = |t: f64| extent(&capacitors.iter().map(|p| p.at(t)).collect::<Vec<_>>());
    Ok(LadderLevel {
        asked,
        factor,
        given_source_ohm: source,
        given_load_ohm: load,
        source_ohm: source * factor,
        load_ohm: load * factor,
        fitting_factor: fits.then(|| best.exp()),
        given_capacitors_f: at(0.0),
        capacitors_f: at(t),
        ladder_parts: parts.len(),
        outside_default_range: parts
            .iter()
            .filter(|p| !p.fits_at(t))
            .map(|p| LadderPart {
                value: p.at(t),
                ..p.clone()
            })
            .collect(),
    })
}

/// The resistors and capacitors among `kept`, with the ranges of
/// `choice`.
fn ladder_parts(passive: &Netlist, kept: &[usize], choice: &PartsChoice) -> Vec<LadderPart> {
    kept.iter()
        .filter_map(|&i| {
            let e = passive.elements.get(i)?;
            let (value, unit, (low, high), range_given) = match *e {
                Element::Resistor { ohm, .. } => (ohm, "ohm", choice.resistor_range_ohm, false),
                Element::Capacitor { farad, .. } => (
                    farad,
                    "F",
                    choice.capacitor_range_f,
                    choice.capacitor_range_given,
                ),
                _ => return None,
            };
            Some(LadderPart {
                designator: e.name().to_string(),
                value,
                unit,
                low,
                high,
                range_given,
            })
        })
        .collect()
}

/// The intersection of the parts' intervals of t: (-inf, inf) for no
/// part, low > high when they do not meet.
fn bounds<'a>(parts: impl Iterator<Item = &'a LadderPart>) -> (f64, f64) {
    parts.fold((f64::NEG_INFINITY, f64::INFINITY), |(l, h), p| {
        let (a, b) = p.fits();
        (l.max(a), h.min(b))
    })
}

/// `t` clamped into `[low, high]`; the middle of an interval reversed by
/// less than [`RANGE_SLACK`] (ends that meet up to rounding), so that
/// both ends' parts miss by at most half of it.
fn clamp_into(t: f64, (low, high): (f64, f64)) -> f64 {
    if low > high {
        0.5 * (low + high)
    } else {
        t.clamp(low, high)
    }
}

/// Smallest and largest of `values`, `None` for none.
fn extent(values: &[f64]) -> Option<[f64; 2]> {
    let min = values.iter().copied().reduce(f64::min)?;
    let max = values.iter().copied().reduce(f64::max)?;
    Some([min, max])
}

/// The t in `[low, high]` whose largest log-distance of a capacitor to
/// its nearest `series` value is smallest, on a grid of
/// [`SCAN_PER_DECADE`] points per decade through t = 0 and both ends;
/// of equal scores, the t nearest 0. With no capacitor, or an interval
/// of one point, the t nearest 0.
fn scan(capacitors: &[&LadderPart], (low, high): (f64, f64), series: Series) -> f64 {
    let nearest = clamp_into(0.0, (low, high));
    if capacitors.is_empty() || low >= high {
        return nearest;
    }
    let mantissas: Vec<f64> = series.mantissas().iter().map(|m| m.ln()).collect();
    let logs: Vec<f64> = capacitors.iter().map(|p| p.value.ln()).collect();
    let score = |t: f64| {
        logs.iter()
            .map(|c| log_distance(&mantissas, c - t))
            .fold(0.0, f64::max)
    };
    let step = LN_10 / SCAN_PER_DECADE;
    let grid = (low / step).ceil() as i64..=(high / step).floor() as i64;
    let candidates = || {
        grid.clone()
            .map(|j| j as f64 * step)
            .chain([low, high, nearest])
    };
    let best = candidates().map(score).fold(f64::INFINITY, f64::min);
    candidates()
        .filter(|&t| score(t) <= best + SCORE_TIE)
        .min_by(|a, b| a.abs().total_cmp(&b.abs()))
        .unwrap_or(nearest)
}

/// The distance, in natural log, of e^x from the nearest value of a
/// series whose decade mantissas have the logarithms `mantissas`
/// (ascending, from ln 1 = 0).
fn log_distance(mantissas: &[f64], x: f64) -> f64 {
    let r = x.rem_euclid(LN_10);
    let i = mantissas.partition_point(|&m| m <= r);
    // The next decade's first value above; the last below.
    let above = mantissas.get(i).copied().unwrap_or(LN_10);
    let below = mantissas[..i].last().copied().unwrap_or(0.0);
    (above - r).min(r - below)
}

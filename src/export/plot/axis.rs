//! Axis ranges and ticks in plot coordinates: log10 of the value on a
//! logarithmic axis, the value itself on a linear one.
//!
//! Invariants: `lo < hi`, both finite; every major tick lies in
//! `[lo, hi]`; ticks are computed as integer multiples of a step (never by
//! repeated addition), so a tick meant to be 0 is 0, not 1e-17.

use crate::export::eng;

/// About this many labelled ticks: 5 to 10 labels fit along 800 px at
/// the tick font size without touching.
const TARGET_TICKS: f64 = 6.0;

/// Relative slack that keeps a tick lying on a range end (up to rounding
/// of `k * step`) inside the range.
const EDGE_SLACK: f64 = 1e-9;

/// Decimal places never exceed this, whatever the step: a step below
/// 1e-12 of the axis unit means the caller should change the unit.
const MAX_DECIMALS: i32 = 12;

/// Auto ranges leave this fraction of the data span free on each side, so
/// a curve at the range end stays clear of the frame.
const AUTO_PAD: f64 = 0.03;

/// One labelled tick.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Tick {
    /// Position in plot coordinates.
    pub at: f64,
    /// Label as printed.
    pub label: String,
}

/// A chart axis.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Axis {
    /// Low end, plot coordinates.
    pub lo: f64,
    /// High end, plot coordinates.
    pub hi: f64,
    /// Whether plot coordinates are log10 of the values.
    pub log: bool,
    /// Labelled ticks with a grid line each.
    pub major: Vec<Tick>,
    /// Unlabelled positions with a faint grid line (log axes only).
    pub minor: Vec<f64>,
}

impl Axis {
    /// Plot coordinate of a value: log10 on a log axis (-inf for 0, which
    /// clipping then handles).
    pub fn to_plot(&self, value: f64) -> f64 {
        if self.log {
            value.log10()
        } else {
            value
        }
    }

    /// A linear axis over `[lo, hi]` (values), tick labels from `label`.
    pub fn linear(lo: f64, hi: f64, label: impl Fn(f64, f64) -> String) -> Axis {
        let step = nice_step(hi - lo);
        let major = multiples(lo, hi, step)
            .into_iter()
            .map(|v| Tick {
                at: v,
                label: label(v, step),
            })
            .collect();
        Axis {
            lo,
            hi,
            log: false,
            major,
            minor: Vec::new(),
        }
    }

    /// A logarithmic axis over `[lo, hi]` (values, both > 0). Labels go on
    /// decades when at least [`MIN_LOG_LABELS`] fall in range; on a narrower range on
    /// 1-2-5 multiples, then on every integer multiple of a decade, and on
    /// less than that on a linear step (a log axis is nearly linear there).
    pub fn logarithmic(lo: f64, hi: f64) -> Axis {
        let decade_sets: [&[f64]; 3] = [&[1.0], &[1.0, 2.0, 5.0], &DIGITS];
        let chosen = decade_sets.iter().find_map(|set| {
            let ticks = decade_multiples(lo, hi, set);
            // Three labels at least: two decades alone leave a whole decade
            // without a label.
            (ticks.len() >= MIN_LOG_LABELS).then_some(ticks)
        });
        let (values, minor) = match chosen {
            Some(values) => {
                let minor = decade_multiples(lo, hi, &DIGITS)
                    .into_iter()
                    .filter(|v| !values.contains(v))
                    .map(f64::log10)
                    .collect();
                (values, minor)
            }
            None => (multiples(lo, hi, nice_step(hi - lo)), Vec::new()),
        };
        let major = values
            .into_iter()
            .map(|v| Tick {
                at: v.log10(),
                label: compact(v),
            })
            .collect();
        Axis {
            lo: lo.log10(),
            hi: hi.log10(),
            log: true,
            major,
            minor,
        }
    }
}

/// Fewest labels a log axis settles for before trying a finer set.
const MIN_LOG_LABELS: usize = 3;

/// 1..9: the integer multiples of a decade.
const DIGITS: [f64; 9] = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0];

/// A value in engineering notation without space or unit, as tick labels
/// on a frequency axis read: "100", "1k", "2.5M".
pub(crate) fn compact(value: f64) -> String {
    eng::format_trimmed(value, "").replace(' ', "")
}

/// A plain decimal with as many places as `step` needs: "-60", "0.5",
/// "0.25".
pub(crate) fn decimal(value: f64, step: f64) -> String {
    let places = (0..MAX_DECIMALS)
        .find(|&p| {
            let scaled = step * 10f64.powi(p);
            (scaled - scaled.round()).abs() <= EDGE_SLACK * scaled
        })
        .unwrap_or(MAX_DECIMALS) as usize;
    // 0.0 and -0.0 both print "0" (a tick at k * step can be -0.0).
    let value = if value == 0.0 { 0.0 } else { value };
    format!("{value:.places$}")
}

/// 1, 2, 2.5 or 5 times a power of ten, the smallest giving at most about
/// [`TARGET_TICKS`] steps over `span` (2.5 fills the gap between 2 and 5,
/// where a short range would otherwise get only three labels).
fn nice_step(span: f64) -> f64 {
    let raw = span / TARGET_TICKS;
    let magnitude = 10f64.powf(raw.log10().floor());
    let factor = [1.0, 2.0, 2.5, 5.0, 10.0]
        .into_iter()
        .find(|f| f * magnitude >= raw)
        .unwrap_or(10.0);
    factor * magnitude
}

/// Every `k * step` in `[lo, hi]`.
fn multiples(lo: f64, hi: f64, step: f64) -> Vec<f64> {
    let slack = EDGE_SLACK * (hi - lo);
    let first = ((lo - slack) / step).ceil() as i64;
    let last = ((hi + slack) / step).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// Every `m * 10^k` in `[lo, hi]` for `m` in `set`, ascending.
fn decade_multiples(lo: f64, hi: f64, set: &[f64]) -> Vec<f64> {
    let slack = 1.0 + EDGE_SLACK;
    let first = lo.log10().floor() as i32;
    let last = hi.log10().floor() as i32;
    (first..=last)
        .flat_map(|k| set.iter().map(move |m| m * 10f64.powi(k)))
        .filter(|v| *v * slack >= lo && *v <= hi * slack)
        .collect()
}

/// A range that holds every finite value, padded by [`AUTO_PAD`] and
/// widened to round numbers; (-1, 1) when there is no finite value.
pub(crate) fn auto_range(values: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    if lo > hi {
        return (-1.0, 1.0);
    }
    let (lo, hi) = if lo == hi {
        (lo - 1.0, hi + 1.0)
    } else {
        let pad = AUTO_PAD * (hi - lo);
        (lo - pad, hi + pad)
    };
    // Half a tick step: ends on round numbers without wasting up to a
    // whole step on each side.
    let step = nice_step(hi - lo) / 2.0;
    ((lo / step).floor() * step, (hi / step).ceil() * step)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn labels(axis: &Axis) -> Vec<&str> {
        axis.major.iter().map(|t| t.label.as_str()).collect()
    }

    #[test]
    fn wide_log_range_labels_decades() {
        let axis = Axis::logarithmic(10.0, 100e3);
        assert_eq!(labels(&axis), ["10", "100", "1k", "10k", "100k"]);
        // 2..9 of each of the four whole decades.
        assert_eq!(axis.minor.len(), 4 * 8);
    }

    #[test]
    fn narrow_log_ranges_fall_back() {
        assert_eq!(
            labels(&Axis::logarithmic(300.0, 5e3)),
            ["500", "1k", "2k", "5k"]
        );
        assert_eq!(
            labels(&Axis::logarithmic(900.0, 1100.0)),
            ["900", "950", "1k", "1.05k", "1.1k"]
        );
    }

    #[test]
    fn linear_ticks_are_exact_multiples() {
        let axis = Axis::linear(-0.3, 0.3, decimal);
        assert_eq!(
            labels(&axis),
            ["-0.3", "-0.2", "-0.1", "0.0", "0.1", "0.2", "0.3"]
        );
    }

    #[test]
    fn decimals_follow_the_step() {
        assert_eq!(decimal(-0.75, 0.25), "-0.75");
        assert_eq!(decimal(-60.0, 20.0), "-60");
        assert_eq!(decimal(-0.0, 0.5), "0.0");
    }

    #[test]
    fn auto_range_covers_finite_values_only() {
        let (lo, hi) = auto_range([-62.0, f64::NEG_INFINITY, 0.4, f64::NAN].into_iter());
        assert_eq!((lo, hi), (-70.0, 10.0));
        assert_eq!(auto_range([3.0].into_iter()), (2.0, 4.0));
    }
}

//! A specification mask for Monte Carlo yield: limits on |H| in dB over
//! frequency ranges, checked at the analysis frequencies.
//!
//! Invariants ([`Mask::new`]): at least one limit; each range finite with
//! 0 <= from <= to; bounds not NaN, at least one finite, min <= max (an
//! absent bound is an infinity). A mask only sees the analysis grid, so
//! running it on a grid that misses a limit's range is an error rather
//! than a silent pass.

use super::AnalysisError;

/// One limit: min_db <= 20 log10 |H| <= max_db for every analysis
/// frequency in [from_hz, to_hz].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Limit {
    /// Start of the range, Hz.
    pub from_hz: f64,
    /// End of the range, Hz (inclusive).
    pub to_hz: f64,
    /// Lower bound, dB (`f64::NEG_INFINITY` for none).
    pub min_db: f64,
    /// Upper bound, dB (`f64::INFINITY` for none).
    pub max_db: f64,
}

impl Limit {
    /// Whether the limit is well formed (see the module doc).
    fn is_valid(&self) -> bool {
        let range = self.from_hz.is_finite()
            && self.to_hz.is_finite()
            && self.from_hz >= 0.0
            && self.from_hz <= self.to_hz;
        let bounds = !self.min_db.is_nan()
            && !self.max_db.is_nan()
            && (self.min_db.is_finite() || self.max_db.is_finite())
            && self.min_db <= self.max_db;
        range && bounds
    }
}

/// A checked set of limits.
#[derive(Debug, Clone, PartialEq)]
pub struct Mask {
    limits: Vec<Limit>,
}

/// One bound check at one analysis frequency.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Check {
    /// Index into the analysis frequencies.
    pub point: usize,
    /// Lower bound, dB.
    pub min_db: f64,
    /// Upper bound, dB.
    pub max_db: f64,
}

impl Mask {
    /// Checks the limits (see the module doc).
    pub fn new(limits: Vec<Limit>) -> Result<Mask, AnalysisError> {
        if limits.is_empty() {
            return Err(AnalysisError::EmptyMask);
        }
        if let Some((index, l)) = limits.iter().enumerate().find(|(_, l)| !l.is_valid()) {
            return Err(AnalysisError::BadLimit {
                index,
                from_hz: l.from_hz,
                to_hz: l.to_hz,
                min_db: l.min_db,
                max_db: l.max_db,
            });
        }
        Ok(Mask { limits })
    }

    /// The limits, as given.
    pub fn limits(&self) -> &[Limit] {
        &self.limits
    }

    /// Every (frequency, bounds) check on this grid; each limit must
    /// cover at least one frequency.
    pub(crate) fn checks(&self, freqs_hz: &[f64]) -> Result<Vec<Check>, AnalysisError> {
        let mut checks = Vec::new();
        for (index, l) in self.limits.iter().enumerate() {
            let before = checks.len();
            checks.extend(
                freqs_hz
                    .iter()
                    .enumerate()
                    .filter(|(_, &f)| f >= l.from_hz && f <= l.to_hz)
                    .map(|(point, _)| Check {
                        point,
                        min_db: l.min_db,
                        max_db: l.max_db,
                    }),
            );
            if checks.len() == before {
                return Err(AnalysisError::LimitNotSampled {
                    index,
                    from_hz: l.from_hz,
                    to_hz: l.to_hz,
                });
            }
        }
        Ok(checks)
    }
}

/// How one response stands against a mask: its smallest distance to a
/// bound, and where.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct MaskVerdict {
    /// Whether every bound is kept.
    pub meets: bool,
    /// The smallest distance to a bound, dB (negative: broken by that
    /// much).
    pub margin_db: f64,
    /// The frequency of that distance, Hz.
    pub at_hz: f64,
    /// The response there, dB.
    pub gain_db: f64,
    /// The bound it is measured to, dB.
    pub limit_db: f64,
    /// Whether that bound is a lower one (a passband limit) rather than
    /// an upper one (a stopband limit).
    pub lower_bound: bool,
}

impl Mask {
    /// How the response `db` at `freqs_hz` stands against the mask.
    pub fn verdict(&self, freqs_hz: &[f64], db: &[f64]) -> Result<MaskVerdict, AnalysisError> {
        let checks = self.checks(freqs_hz)?;
        // `checks` holds at least one check per limit, and every limit has
        // a finite bound (Mask::new), so there is a closest bound.
        closest(&checks, db)
            .map(|c| c.verdict(freqs_hz, db))
            .ok_or(AnalysisError::EmptyMask)
    }
}

/// The bound a response comes closest to (or breaks by most).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Closest {
    /// The distance, dB (negative: broken by that much).
    pub margin_db: f64,
    /// Index into the analysis frequencies.
    pub point: usize,
    /// The bound, dB.
    pub limit_db: f64,
    /// Whether it is a lower bound.
    pub lower_bound: bool,
}

impl Closest {
    /// As a verdict on the grid `freqs_hz` with the response `db`.
    pub(crate) fn verdict(self, freqs_hz: &[f64], db: &[f64]) -> MaskVerdict {
        MaskVerdict {
            meets: self.margin_db >= 0.0,
            margin_db: self.margin_db,
            at_hz: freqs_hz[self.point],
            gain_db: db[self.point],
            limit_db: self.limit_db,
            lower_bound: self.lower_bound,
        }
    }
}

/// The bound of `checks` closest to the response `db` (the first of
/// equals, a lower bound before an upper one at a point), `None` when no
/// check has a finite bound.
pub(crate) fn closest(checks: &[Check], db: &[f64]) -> Option<Closest> {
    let mut best: Option<Closest> = None;
    for c in checks {
        let g = db[c.point];
        for (limit_db, distance, lower_bound) in [
            (c.min_db, g - c.min_db, true),
            (c.max_db, c.max_db - g, false),
        ] {
            if limit_db.is_finite() && best.is_none_or(|b| distance < b.margin_db) {
                best = Some(Closest {
                    margin_db: distance,
                    point: c.point,
                    limit_db,
                    lower_bound,
                });
            }
        }
    }
    best
}

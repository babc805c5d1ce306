//! A specification mask for Monte Carlo yield: limits on |H| in dB over
//! frequency ranges, checked at the analysis frequencies.
//!
//! Invariants ([`Mask::new`]): at least one limit; each range finite with
//! 0 <= from <= to; bounds not NaN, at least one finite, min <= max (an
//! absent bound is an infinity). A mask only sees the analysis grid, so
//! running it on a grid that misses a limit's range is an error rather
//! than a silent pass.

use std::f64::consts::TAU;

use num_complex::Complex64;

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

/// Refinements of a verdict around its closest point, and the points each
/// spreads between that point's two neighbours: two zooms of 32 narrow a
/// 201-point log grid's step (2 % over two decades) to 4e-5 of the
/// frequency, where a ripple peak's loss is within 1e-6 dB of its top.
pub const VERDICT_ZOOMS: usize = 2;

/// See [`VERDICT_ZOOMS`].
pub const VERDICT_ZOOM_POINTS: usize = 32;

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

    /// [`Mask::verdict`] of the response `db` at `freqs_hz` (ascending),
    /// with the response also taken at `resonances_hz` (see
    /// [`Mask::resonance_points`]), refined [`VERDICT_ZOOMS`] times around
    /// every local minimum of the distance to the mask within
    /// [`REFINE_BAND_DB`] of the closest, by [`VERDICT_ZOOM_POINTS`]
    /// points spanning each one's two neighbours, whose gains
    /// `gain_db_at` gives. A ripple peak falls between grid points:
    /// unrefined, the vibration example's margin on parts moved by
    /// 1.9e-3 dB and a 7th-order Chebyshev highpass's by 1.0e-3 dB when
    /// the grid was doubled; refined around the closest point alone, no
    /// verdict of tests/design.rs's `verdicts_hold_when_the_grid_doubles`
    /// moved by more than 1.3e-6 dB, but drawn boards of the 6th-order
    /// Chebyshev highpass demo passed on one grid and failed on the other
    /// where another ripple peak than the grid's closest was the true one.
    /// A peak narrower than the grid's step is no local minimum of it at
    /// all: the resonances are where such peaks lie.
    /// Only minima that may come within `ceiling_db` of the mask are
    /// refined: infinite for a verdict's exact margin, [`REFINE_BAND_DB`]
    /// for a Monte Carlo board, whose pass needs only the minima that may
    /// break the mask, and whose margin when it fails only those near its
    /// closest.
    pub fn refined_verdict<E: From<AnalysisError>>(
        &self,
        freqs_hz: &[f64],
        db: &[f64],
        resonances_hz: &[f64],
        ceiling_db: f64,
        gain_db_at: impl FnMut(&[f64]) -> Result<Vec<f64>, E>,
    ) -> Result<MaskVerdict, E> {
        let checks = self.checks(freqs_hz)?;
        self.refined_verdict_on(&checks, freqs_hz, db, resonances_hz, ceiling_db, gain_db_at)
    }

    /// [`Mask::refined_verdict`] with the checks of `freqs_hz` already
    /// made (a Monte Carlo makes them once for every board, and most
    /// boards need no zoom: nothing else is computed for them).
    pub(crate) fn refined_verdict_on<E: From<AnalysisError>>(
        &self,
        checks: &[Check],
        freqs_hz: &[f64],
        db: &[f64],
        resonances_hz: &[f64],
        ceiling_db: f64,
        mut gain_db_at: impl FnMut(&[f64]) -> Result<Vec<f64>, E>,
    ) -> Result<MaskVerdict, E> {
        // The grid as refined so far: the caller's until a point is added.
        let mut refined: Option<Refined> = None;
        let mut added = resonances_hz.to_vec();
        let mut zooms = 0;
        loop {
            let (freqs, gain, checks) = match &refined {
                Some(r) => (r.freqs_hz.as_slice(), r.db.as_slice(), r.checks.as_slice()),
                None => (freqs_hz, db, checks),
            };
            added.sort_by(f64::total_cmp);
            added.dedup();
            added.retain(|f| freqs.binary_search_by(|g| g.total_cmp(f)).is_err());
            if !added.is_empty() {
                let added_db = gain_db_at(&added)?;
                refined = Some(self.merged(freqs, gain, std::mem::take(&mut added), added_db)?);
                continue;
            }
            let closest = closest(checks, gain).ok_or(AnalysisError::EmptyMask)?;
            if zooms == VERDICT_ZOOMS {
                return Ok(closest.verdict(freqs, gain));
            }
            zooms += 1;
            let margins = point_margins(checks, gain);
            let within = (closest.margin_db + REFINE_BAND_DB).min(ceiling_db);
            let last = freqs.len() - 1;
            for i in 0..freqs.len() {
                let m = margins[i];
                let local = (i == 0 || m <= margins[i - 1]) && (i == last || m <= margins[i + 1]);
                if !(local && m.min(parabola_minimum(freqs, &margins, i)) <= within) {
                    continue;
                }
                let (lo, hi) = (freqs[i.saturating_sub(1)], freqs[(i + 1).min(last)]);
                added.extend(
                    (1..VERDICT_ZOOM_POINTS)
                        .map(|k| lo + (hi - lo) * k as f64 / VERDICT_ZOOM_POINTS as f64),
                );
            }
            if added.is_empty() {
                return Ok(closest.verdict(freqs, gain));
            }
        }
    }

    /// The response at `freqs_hz` with `added_db` at `added_hz` merged
    /// in, in frequency order, and its checks.
    fn merged(
        &self,
        freqs_hz: &[f64],
        db: &[f64],
        added_hz: Vec<f64>,
        added_db: Vec<f64>,
    ) -> Result<Refined, AnalysisError> {
        let mut merged: Vec<(f64, f64)> = freqs_hz
            .iter()
            .copied()
            .zip(db.iter().copied())
            .chain(added_hz.into_iter().zip(added_db))
            .collect();
        merged.sort_by(|a, b| a.0.total_cmp(&b.0));
        let (freqs_hz, db): (Vec<f64>, Vec<f64>) = merged.into_iter().unzip();
        let checks = self.checks(&freqs_hz)?;
        Ok(Refined {
            freqs_hz,
            db,
            checks,
        })
    }

    /// Where the natural frequencies `roots_rad_s` of a response may put
    /// a peak or a dip narrower than its grid's step, within `span_hz`
    /// and a limit's range: around each complex root -sigma + j omega,
    /// [`RESONANCE_POINTS`] frequencies sigma apart centred on omega (a
    /// resonance of half-power half-width sigma, common practice). A
    /// tolerance draw of the delivered mains notch parts a near-cancelled
    /// pole pair of Q 734 at 50.35 Hz from its zeros: a peak 0.14 % wide
    /// in the stopband, which 3,000 log-spaced points over the view did
    /// not all find (measured: 409 boards of 2,000 meeting the mask there,
    /// 282 with the stopband's own 1,600); a board of a 990 to 1010 Hz
    /// elliptic bandstop has its deepest passband trough 2.6 half-widths
    /// below its pole at 908 Hz (tests/design.rs's
    /// `monte_carlo_figures_hold_on_a_finer_grid`).
    pub fn resonance_points(&self, roots_rad_s: &[Complex64], span_hz: [f64; 2]) -> Vec<f64> {
        let half = (RESONANCE_POINTS / 2) as f64;
        roots_rad_s
            .iter()
            .filter(|s| s.im > 0.0)
            .flat_map(|s| {
                let (f, sigma) = (s.im / TAU, s.re.abs() / TAU);
                (0..RESONANCE_POINTS).map(move |k| f + (k as f64 - half) * sigma)
            })
            .filter(|&f| f >= span_hz[0] && f <= span_hz[1])
            .filter(|&f| self.limits.iter().any(|l| f >= l.from_hz && f <= l.to_hz))
            .collect()
    }
}

/// Points of [`Mask::resonance_points`] around each resonance, an odd
/// count: four half-widths on either side of the pole.
pub const RESONANCE_POINTS: usize = 9;

/// A response with points added to its grid, and its checks.
struct Refined {
    freqs_hz: Vec<f64>,
    db: Vec<f64>,
    checks: Vec<Check>,
}

/// At each point of a response `db`, its distance to the nearest bound
/// of `checks` that applies there, dB (infinite where none does).
fn point_margins(checks: &[Check], db: &[f64]) -> Vec<f64> {
    let mut margins = vec![f64::INFINITY; db.len()];
    for c in checks {
        let g = db[c.point];
        let m = (g - c.min_db).min(c.max_db - g);
        margins[c.point] = margins[c.point].min(m);
    }
    margins
}

/// The least of the parabola through the distances at points `i - 1`,
/// `i`, `i + 1` (over log frequency), where a coarse grid straddles a
/// ripple peak (the 6th-order Chebyshev highpass demo's boards read
/// 0.012 dB clear on its grid and 0.004 dB past the limit between two of
/// its points); the distance itself at the ends of the grid or where the
/// three do not curve upward.
fn parabola_minimum(freqs_hz: &[f64], margins: &[f64], i: usize) -> f64 {
    if i == 0 || i + 1 >= freqs_hz.len() {
        return margins[i];
    }
    let (x0, x1, x2) = (freqs_hz[i - 1].ln(), freqs_hz[i].ln(), freqs_hz[i + 1].ln());
    let (y0, y1, y2) = (margins[i - 1], margins[i], margins[i + 1]);
    // Divided differences: y = y1 + b (x - x1) + a (x - x1)(x - x1 - ...).
    let d01 = (y1 - y0) / (x1 - x0);
    let d12 = (y2 - y1) / (x2 - x1);
    let a = (d12 - d01) / (x2 - x0);
    if a.is_nan() || a <= 0.0 || a.is_infinite() {
        return margins[i];
    }
    // The parabola's slope at x1 from the two secants.
    let b = d01 + a * (x1 - x0);
    y1 - b * b / (4.0 * a)
}

/// How far above the closest distance to the mask a local minimum of the
/// distance is still refined, dB: the grid reads a ripple peak at most
/// 1.9e-3 dB shallow (see [`Mask::refined_verdict`]), so a minimum 0.01
/// dB further from the mask than the closest cannot become the closest.
pub const REFINE_BAND_DB: f64 = 0.01;

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

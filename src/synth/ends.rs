//! Extraction from both ends of the ladder, joined where they meet.
//!
//! Why: each step of the continued fraction (and of zero shifting)
//! amplifies the rounding left in the remainder, by up to two decades per
//! arm (measured on Butterworth and Chebyshev ladders in double-double),
//! so a single pass from the source can lose all 32 digits by order 20.
//! The growth depends on where the reflection zeros lie: fast when they
//! are in the left half plane, slow in the right one, moderate on the jw
//! axis; the mirrored ladder seen from the load has them mirrored. So both
//! ends are extracted as far as they stay accurate, and joined at the arm
//! where the worse of the two error estimates is smallest.
//!
//! The load end: for a lossless reciprocal two-port, unitarity gives
//! S22 = -S11(-s) S21(s)/S21(-s) on the jw axis; with S11 = F/E and an even
//! transmission polynomial P, S22 = -F(-s)/E(s). Seen from the load (and
//! normalized to it), the ladder is therefore the same kind of ladder with
//! the reflection zeros mirrored (f -> -f), its source resistance 1/r, and
//! the form of its last arm. That mirrored ladder is extracted by the same
//! code, reversed, and scaled back by the load resistance.
//!
//! Invariant: both ends compute the junction arm; they must agree to
//! [`JUNCTION_TOLERANCE`], which checks the whole ladder the way the
//! remainder-equals-load test checks a single pass (a wrong level, ratio or
//! orientation makes them disagree at order 1).

use super::extraction::{extract, other_orders, usual_order, Extraction, Section, ACCURACY_LIMIT};
use super::poly::{dd, Poly};
use super::{ArmValues, Form, SynthError};

/// Largest relative difference accepted between the two computations of
/// the junction arm. Measured: at most 2.3e-14 over the all-pole test
/// matrix (orders 1 to 25, ratios 0.2 to 5, both forms); for elliptic
/// ladders it grows with order and narrowness of the transition, past
/// 1e-9 where the f64 prototype no longer fixes the ladder (about order
/// 16 for ordinary masks). Every ladder accepted at 1e-9 met the prototype
/// to 2e-4 dB or better; at 1e-7 one came out 3e-3 dB off, so the check
/// stays at 1e-9 and refuses instead. Roots that do not describe one
/// ladder make the ends disagree at order 1.
const JUNCTION_TOLERANCE: f64 = 1e-9;

/// The arms of the ladder from source to load, normalized to a 1 ohm
/// source, for the polished E and the reflection polynomial F^ of the
/// oriented zeros (both monic), and the transmission zeros.
pub(crate) fn ladder_arms(
    e: &Poly,
    f: &Poly,
    zeros: &[f64],
    load_ratio: f64,
    form: Form,
) -> Result<Vec<ArmValues>, SynthError> {
    let source = End::new(e, f);
    // prod(s + f_i) = (-1)^n F^(-s): the mirrored zeros, still monic.
    let sign = if e.degree().is_multiple_of(2) {
        1.0
    } else {
        -1.0
    };
    let load = End::new(e, &f.mirrored().scaled(dd(sign)));
    let usual = usual_order(zeros);
    let attempt = |order: &[f64]| join(&source, &load, order, load_ratio, form);
    let first = match attempt(&usual) {
        Ok(arms) => return Ok(arms),
        Err(e) => e,
    };
    let mut tried = 1;
    for order in other_orders(&usual) {
        tried += 1;
        if let Ok(arms) = attempt(&order) {
            return Ok(arms);
        }
    }
    Err(if tried == 1 {
        first
    } else {
        SynthError::NoZeroOrder {
            tried,
            first: Box::new(first),
        }
    })
}

/// The primary immittance (E + F^)/(E - F^) seen from one end, F^ monic.
struct End {
    num: Poly,
    den: Poly,
    order: usize,
}

impl End {
    fn new(e: &Poly, f: &Poly) -> End {
        let order = e.degree();
        // E and F^ are both monic of degree n: s^n cancels exactly in E - F^.
        End {
            num: e.add_signed(f, 1.0),
            den: e.add_signed(f, -1.0).truncated(order - 1),
            order,
        }
    }

    /// The arms this end yields accurately, after `leading_full` full
    /// removals, removing `zeros` in order.
    fn extract(&self, zeros: &[f64], leading_full: usize) -> Result<Extraction, SynthError> {
        extract(self.num.clone(), self.den.clone(), zeros, leading_full)
    }
}

/// Extracts from both ends, picks the junction arm, checks that both ends
/// agree on it, and joins the source's arms before it to the load's arms
/// from it on.
fn join(
    source: &End,
    load: &End,
    order: &[f64],
    load_ratio: f64,
    form: Form,
) -> Result<Vec<ArmValues>, SynthError> {
    let n = source.order;
    let from_source = source.extract(order, 0)?;
    // Seen from the load, the zeros at infinity come first (see extract).
    let reversed: Vec<f64> = order.iter().rev().copied().collect();
    let at_infinity = n - 2 * order.len();
    let from_load = load.extract(&reversed, at_infinity - 1)?;
    let middle = junction(&from_source, &from_load, n).ok_or(SynthError::NoJunction {
        order: n,
        from_source: from_source.sections.len(),
        from_load: from_load.sections.len(),
        limit: ACCURACY_LIMIT,
    })?;
    let mut arms = arm_values(&from_source.sections[..=middle], form);
    // The mirrored ladder is normalized to the load resistance.
    let mut tail: Vec<ArmValues> =
        arm_values(&from_load.sections[..n - middle], form_at_load_end(form, n))
            .into_iter()
            .rev()
            .map(|a| a.impedance_scaled(load_ratio))
            .collect();
    let mismatch = relative_mismatch(arms[middle], tail[0]);
    // Never NaN: every value was checked positive and finite.
    if mismatch > JUNCTION_TOLERANCE {
        return Err(SynthError::JunctionMismatch {
            arm: middle,
            from_source: arms[middle],
            from_load: tail[0],
            tolerance: JUNCTION_TOLERANCE,
        });
    }
    arms.extend(tail.drain(1..));
    Ok(arms)
}

/// The arm where the ends meet: one both extracted, with the smallest of
/// the two ends' larger error estimates there.
fn junction(from_source: &Extraction, from_load: &Extraction, n: usize) -> Option<usize> {
    let cost = |m: usize| from_source.residues[m].max(from_load.residues[n - 1 - m]);
    (0..n)
        .filter(|&m| m < from_source.sections.len() && n - 1 - m < from_load.sections.len())
        .min_by(|&a, &b| cost(a).total_cmp(&cost(b)))
}

/// The form of the ladder read from the load: series last arm reads as
/// series first. Arm n-1 is series when n-1 is even in `MinCapacitor`.
fn form_at_load_end(form: Form, n: usize) -> Form {
    let last_series = (n - 1).is_multiple_of(2) == (form == Form::MinCapacitor);
    if last_series {
        Form::MinCapacitor
    } else {
        Form::MinInductor
    }
}

/// Largest relative difference between two arms' values; infinite when
/// they are not the same kind of arm.
fn relative_mismatch(a: ArmValues, b: ArmValues) -> f64 {
    let rel = |x: f64, y: f64| ((x - y) / x).abs();
    match (a, b) {
        (ArmValues::SeriesL(x), ArmValues::SeriesL(y))
        | (ArmValues::ShuntC(x), ArmValues::ShuntC(y)) => rel(x, y),
        (ArmValues::SeriesTank(l1, c1), ArmValues::SeriesTank(l2, c2))
        | (ArmValues::ShuntResonator(l1, c1), ArmValues::ShuntResonator(l2, c2)) => {
            rel(l1, l2).max(rel(c1, c2))
        }
        _ => f64::INFINITY,
    }
}

/// Reads the form-independent sections as arms of `form`: arm i is series
/// when i is even in the `MinCapacitor` form and odd in `MinInductor`;
/// series arms hold inductors (or parallel tanks), shunt arms capacitors
/// (or series resonators). The primary kind is L in `MinCapacitor` and C in
/// `MinInductor`.
fn arm_values(sections: &[Section], form: Form) -> Vec<ArmValues> {
    sections
        .iter()
        .enumerate()
        .map(|(i, section)| {
            let series = (i % 2 == 0) == (form == Form::MinCapacitor);
            match (*section, series) {
                (Section::Single(v), true) => ArmValues::SeriesL(v),
                (Section::Single(v), false) => ArmValues::ShuntC(v),
                (Section::Resonator { primary, dual }, true) => {
                    ArmValues::SeriesTank(dual, primary)
                }
                (Section::Resonator { primary, dual }, false) => {
                    ArmValues::ShuntResonator(primary, dual)
                }
            }
        })
        .collect()
}

//! The checks a filter mask must pass wherever it comes from (a design
//! file or command-line flags). Problems name a [`MaskField`]; each caller
//! turns it into its own key or flag name.

use super::{Edge, Kind};

/// A field of a mask.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MaskField {
    /// The passband edge(s).
    Passband,
    /// The stopband edge(s).
    Stopband,
    /// The passband ripple.
    Ripple,
    /// The stopband attenuation.
    Attenuation,
}

/// What is wrong with one field: the value as written and what would be
/// accepted.
#[derive(Debug, Clone, PartialEq)]
pub struct MaskProblem {
    /// The field.
    pub field: MaskField,
    /// The value as written.
    pub got: String,
    /// What would be accepted.
    pub expected: String,
}

fn show(e: Edge) -> String {
    match e {
        Edge::Single(f) => format!("{f}"),
        Edge::Pair(a, b) => format!("[{a}, {b}]"),
    }
}

/// An edge of the right shape for `kind`, every frequency finite and
/// positive, a pair ascending.
pub fn check_edge(field: MaskField, kind: Kind, edge: Edge) -> Result<Edge, MaskProblem> {
    let ok = |f: f64| f.is_finite() && f > 0.0;
    let good = match (kind.is_band(), edge) {
        (false, Edge::Single(f)) => ok(f),
        (true, Edge::Pair(lo, hi)) => ok(lo) && ok(hi) && lo < hi,
        _ => false,
    };
    if good {
        return Ok(edge);
    }
    let expected = if kind.is_band() {
        "expected [low, high] in Hz with 0 < low < high, for a band kind"
    } else {
        "expected one frequency in Hz greater than 0, for a lowpass or highpass"
    };
    Err(MaskProblem {
        field,
        got: show(edge),
        expected: expected.to_string(),
    })
}

/// The stopband must lie on the stopping side of the passband.
pub fn check_sides(kind: Kind, pass: Edge, stop: Edge) -> Result<(), MaskProblem> {
    let (ok, expected) = match (kind, pass, stop) {
        (Kind::Lowpass, Edge::Single(p), Edge::Single(s)) => (
            s > p,
            format!("expected a stopband edge above the passband edge {p} Hz"),
        ),
        (Kind::Highpass, Edge::Single(p), Edge::Single(s)) => (
            s < p,
            format!("expected a stopband edge below the passband edge {p} Hz"),
        ),
        (Kind::Bandpass, Edge::Pair(p1, p2), Edge::Pair(s1, s2)) => (
            s1 < p1 && s2 > p2,
            format!("expected [low, high] outside the passband [{p1}, {p2}] Hz"),
        ),
        (Kind::Bandstop, Edge::Pair(p1, p2), Edge::Pair(s1, s2)) => (
            s1 > p1 && s2 < p2,
            format!("expected [low, high] inside the passband edges [{p1}, {p2}] Hz"),
        ),
        _ => (
            false,
            "expected the same shape as the passband edge".to_string(),
        ),
    };
    if ok {
        Ok(())
    } else {
        Err(MaskProblem {
            field: MaskField::Stopband,
            got: show(stop),
            expected,
        })
    }
}

/// Ripple and attenuation in dB: both positive, attenuation above ripple.
pub fn check_levels(ripple_db: f64, attenuation_db: Option<f64>) -> Result<(), MaskProblem> {
    if !(ripple_db.is_finite() && ripple_db > 0.0) {
        return Err(MaskProblem {
            field: MaskField::Ripple,
            got: ripple_db.to_string(),
            expected: "expected a ripple in dB greater than 0".to_string(),
        });
    }
    match attenuation_db {
        Some(a) if !(a.is_finite() && a > ripple_db) => Err(MaskProblem {
            field: MaskField::Attenuation,
            got: a.to_string(),
            expected: format!(
                "expected an attenuation in dB greater than the passband ripple ({ripple_db} dB)"
            ),
        }),
        _ => Ok(()),
    }
}

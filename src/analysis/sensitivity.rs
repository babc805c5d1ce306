//! First-order sensitivities of |H| to every R, C, L and op-amp
//! gain-bandwidth, by the adjoint method.
//!
//! With A(p) x = b, A = G + sC and H = V(out)/V(inp), one transposed solve
//! A^T y = e_out / V(out) - e_inp / V(inp) gives, for every parameter p,
//! d ln H / d ln p = -y^T (p dA/dp) x (Director and Rohrer, "The
//! generalized adjoint network and network sensitivities", IEEE Trans.
//! Circuit Theory CT-16, 1969; see [`crate::circuit::Adjoint`]).
//!
//! p dA/dp comes straight from the element's stamps, because each
//! parameter enters the stamps as a single power (the stamp layout of
//! `circuit::mna`):
//!
//! | element        | parameter | entries that hold it        | p d/dp of them |
//! |----------------|-----------|-----------------------------|----------------|
//! | resistor R     | ohm       | every G entry, +-1/R        | -entry         |
//! | capacitor C    | farad     | every C entry, +-C          | +entry         |
//! | inductor L     | henry     | its C entry, -L             | +entry         |
//! | single-pole op-amp | gbw_hz | its C entry, 1/(2 pi gbw)  | -entry         |
//! | two-pole op-amp | gbw_hz    | its C entries, 1/(2 pi gbw) and 1/w2 | -entry |
//!
//! (the other entries of an inductor or op-amp are constants). A two-pole
//! op-amp's GBW moves its second pole in proportion, as the Monte Carlo
//! spread draws it (see `circuit::OpAmpModel::with_gbw`), so both its C
//! entries scale as 1/gbw. Ideal op-amps and sources have no parameter
//! here.
//!
//! The relative sensitivity S = d ln H / d ln p is complex: its real part
//! is d ln|H| / d ln p, so a 1 % change of p moves |H| by
//! 20 / ln 10 x 0.01 x Re S dB, the "dB per %" of the reports; its
//! imaginary part is d arg H / d ln p in radians.

use std::f64::consts::{LN_10, TAU};

use num_complex::Complex64;

use super::AnalysisError;
use crate::circuit::{AcSystem, CircuitError, Element, OpAmpModel, Target};

/// dB per percent for a relative sensitivity of 1 neper per unit of
/// ln p: 20 / ln 10 dB per neper, times 0.01 (1 % is d ln p = 0.01 to
/// first order).
const DB_PER_PERCENT: f64 = 20.0 / LN_10 * 0.01;

/// Which quantity of an element a sensitivity or a tolerance refers to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Parameter {
    /// Its value: ohm, farad or henry.
    Value,
    /// The gain-bandwidth product of a single-pole or two-pole op-amp
    /// (a second pole moving with it).
    GainBandwidth,
}

/// One parameter of A and its log-derivative p dA/dp as matrix entries.
#[derive(Debug, Clone)]
pub(crate) struct Derivative {
    /// Element index in the netlist.
    pub element: usize,
    /// Which of its quantities.
    pub parameter: Parameter,
    /// p dA/dp, as (entry of G or C, value).
    entries: Vec<(Target, f64)>,
}

impl Derivative {
    /// d ln H / d ln p from a solution and its adjoint at s.
    fn relative(&self, s: Complex64, x: &[Complex64], y: &[Complex64]) -> Complex64 {
        let sum: Complex64 = self
            .entries
            .iter()
            .map(|&(target, d)| match target {
                Target::G(r, c) => y[r] * x[c] * d,
                Target::C(r, c) => y[r] * x[c] * (s * d),
                // `derivatives` keeps no entry of b (no parameter is in it).
                Target::B(_) => Complex64::new(0.0, 0.0),
            })
            .sum();
        -sum
    }
}

/// Every parameter of the system, in element order, with p dA/dp (see
/// the table in the module doc).
pub(crate) fn derivatives(system: &AcSystem) -> Result<Vec<Derivative>, CircuitError> {
    let mut out = Vec::new();
    for (index, element) in system.netlist().elements.iter().enumerate() {
        let (parameter, in_g, sign) = match element {
            Element::Resistor { .. } => (Parameter::Value, true, -1.0),
            Element::Capacitor { .. } | Element::Inductor { .. } => (Parameter::Value, false, 1.0),
            Element::OpAmp {
                model: OpAmpModel::SinglePole { .. } | OpAmpModel::TwoPole { .. },
                ..
            } => (Parameter::GainBandwidth, false, -1.0),
            Element::OpAmp { .. } | Element::VoltageSource { .. } => continue,
        };
        let entries = system
            .element_stamps(index)?
            .into_iter()
            .filter(|(target, _)| match target {
                Target::G(..) => in_g,
                Target::C(..) => !in_g,
                Target::B(_) => false,
            })
            .map(|(target, value)| (target, sign * value))
            .collect();
        out.push(Derivative {
            element: index,
            parameter,
            entries,
        });
    }
    Ok(out)
}

/// The sensitivities of one parameter over a frequency list.
#[derive(Debug, Clone, PartialEq)]
pub struct Sensitivity {
    /// Element index in the netlist.
    pub element: usize,
    /// Element name.
    pub name: String,
    /// Which of its quantities.
    pub parameter: Parameter,
    /// d ln H / d ln p at each frequency (real part: nepers of |H|,
    /// imaginary part: radians of phase, per unit of ln p).
    pub relative: Vec<Complex64>,
}

impl Sensitivity {
    /// The change of |H| in dB for a +1 % change of the parameter, to
    /// first order, at each frequency.
    pub fn db_per_percent(&self) -> Vec<f64> {
        self.relative
            .iter()
            .map(|s| DB_PER_PERCENT * s.re)
            .collect()
    }
}

/// Sensitivities of every parameter at each frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct SensitivityTable {
    /// The frequencies, Hz, as given.
    pub freq_hz: Vec<f64>,
    /// One row per parameter, in element order.
    pub rows: Vec<Sensitivity>,
}

/// Sensitivities of H = V(out)/V(inp) to every R, C, L and op-amp
/// gain-bandwidth at each frequency: one factorization, one solve
/// and one transposed solve per frequency. V(out) must be non-zero at
/// every frequency: the relative sensitivity grows without bound near a
/// transmission zero, and an exact zero is an error.
pub fn sensitivities(
    system: &mut AcSystem,
    out: usize,
    inp: usize,
    freqs_hz: &[f64],
) -> Result<SensitivityTable, AnalysisError> {
    let derivatives = derivatives(system)?;
    let mut rows: Vec<Sensitivity> = derivatives
        .iter()
        .map(|d| Sensitivity {
            element: d.element,
            name: system.netlist().elements[d.element].name().to_string(),
            parameter: d.parameter,
            relative: Vec::with_capacity(freqs_hz.len()),
        })
        .collect();
    for &f in freqs_hz {
        let s = Complex64::new(0.0, TAU * f);
        let adjoint = system.transfer_adjoint(f, out, inp)?;
        for (row, d) in rows.iter_mut().zip(&derivatives) {
            row.relative.push(d.relative(s, adjoint.x, adjoint.y));
        }
    }
    Ok(SensitivityTable {
        freq_hz: freqs_hz.to_vec(),
        rows,
    })
}

/// Where to summarize sensitivities: the edges and a passband grid.
#[derive(Debug, Clone, PartialEq)]
pub struct SummaryPoints {
    /// The passband edge(s), Hz (two for band kinds).
    pub passband_edges_hz: Vec<f64>,
    /// A grid over the passband(s), Hz, for the worst case.
    pub passband_hz: Vec<f64>,
    /// The stopband edge(s), Hz.
    pub stopband_edges_hz: Vec<f64>,
}

/// The largest sensitivity in magnitude over a set of frequencies.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Extreme {
    /// dB per %, with its sign.
    pub db_per_percent: f64,
    /// Where it occurs, Hz; NaN where no point of its group had an
    /// output to be sensitive (see [`summarize`]), and
    /// [`Extreme::found`] is false.
    pub freq_hz: f64,
}

impl Extreme {
    /// Whether a point of its group had a non-vanishing output.
    pub fn found(&self) -> bool {
        !self.freq_hz.is_nan()
    }
}

/// The sensitivity summary of one parameter.
#[derive(Debug, Clone, PartialEq)]
pub struct SensitivitySummary {
    /// Element index in the netlist.
    pub element: usize,
    /// Element name.
    pub name: String,
    /// Which of its quantities.
    pub parameter: Parameter,
    /// At the passband edge (the larger of two edges).
    pub passband_edge: Extreme,
    /// The worst case over the passband grid.
    pub passband_worst: Extreme,
    /// At the stopband edge (the larger of two edges).
    pub stopband_edge: Extreme,
}

/// The largest |value| of `db` over the frequencies `freqs`.
fn extreme(freqs: &[f64], db: &[f64]) -> Extreme {
    let (freq_hz, db_per_percent) =
        freqs
            .iter()
            .zip(db)
            .map(|(&f, &d)| (f, d))
            .fold((f64::NAN, 0.0_f64), |best, cand| {
                if best.0.is_nan() || cand.1.abs() > best.1.abs() {
                    cand
                } else {
                    best
                }
            });
    Extreme {
        db_per_percent,
        freq_hz,
    }
}

/// Sensitivity of every parameter at the passband edge(s), worst over
/// the passband grid and at the stopband edge(s), in dB per %.
pub fn summarize(
    system: &mut AcSystem,
    out: usize,
    inp: usize,
    points: &SummaryPoints,
) -> Result<Vec<SensitivitySummary>, AnalysisError> {
    let groups = [
        ("passband edge", &points.passband_edges_hz),
        ("passband", &points.passband_hz),
        ("stopband edge", &points.stopband_edges_hz),
    ];
    if let Some((what, _)) = groups.iter().find(|(_, f)| f.is_empty()) {
        return Err(AnalysisError::EmptyGrid { what });
    }
    // A point where the output vanishes exactly (a stopband edge decades
    // below a highpass's passband, where the transfer underflows to 0:
    // found by the generative test, seed 9) has no relative sensitivity:
    // the solve reports it, and it is left out and the rest solved again
    // (no extra solve where none vanishes). A group left empty has no
    // extreme (Extreme::found is false; the tables leave its cells empty).
    let mut kept = groups.map(|(_, freqs)| freqs.clone());
    let (all, table) = loop {
        let all: Vec<f64> = kept.concat();
        match sensitivities(system, out, inp, &all) {
            Err(AnalysisError::Circuit(CircuitError::ZeroVoltage { node, freq_hz }))
                if node == out && all.contains(&freq_hz) =>
            {
                for group in &mut kept {
                    group.retain(|&f| f != freq_hz);
                }
            }
            done => break (all, done?),
        }
    };
    let (edge_end, pass_end) = (kept[0].len(), kept[0].len() + kept[1].len());
    let summarize_row = |row: &Sensitivity| {
        let db = row.db_per_percent();
        let part = |range: std::ops::Range<usize>| extreme(&all[range.clone()], &db[range]);
        SensitivitySummary {
            element: row.element,
            name: row.name.clone(),
            parameter: row.parameter,
            passband_edge: part(0..edge_end),
            passband_worst: part(edge_end..pass_end),
            stopband_edge: part(pass_end..all.len()),
        }
    };
    Ok(table.rows.iter().map(summarize_row).collect())
}

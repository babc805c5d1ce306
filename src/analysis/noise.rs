//! Output noise of a circuit: the power density every source puts at the
//! output, by one adjoint solve per frequency for all of them.
//!
//! With A = G + sC and y solving A^T y = e_out, a current i injected into
//! node n adds y_n i to V(out), and a voltage e in the right-hand side of
//! equation r adds y_r e. So, with uncorrelated sources (common
//! practice):
//! - a resistor R between a and b: its thermal current noise 4 k T / R
//!   (Johnson and Nyquist, 1928) across it gives 4 k T / R |y_a - y_b|^2;
//! - an op-amp's input voltage noise e_n, in series with its
//!   non-inverting input, enters its gain row: e_n^2 |y_row|^2;
//! - its input current noise i_n, into each input: i_n^2 (|y_+|^2 +
//!   |y_-|^2).
//!
//! The signal source is a short (its AC value does not enter). The
//! passive ideal's output noise is therefore 4 k T Re Z_out (Nyquist's
//! theorem), which the tests check at every frequency.

use num_complex::Complex64;

use super::AnalysisError;
use crate::circuit::{AcSystem, Element, Netlist, OpAmpNoise, SparseAc, BOLTZMANN_J_PER_K};

/// Points per decade of the grid a band's noise is integrated on: the
/// trapezoidal rule in ln f on 400 points per decade (0.58 % apart) moves
/// by at most 4.7e-4 dB when the points are doubled, on every build of
/// four examples and a Q = 20 bandpass (tests/noise.rs,
/// `integrals_hold_when_the_grid_doubles`); on 200 the vibration
/// example's FDNR build at a 1 kohm level moved by 1.25e-3 dB.
pub const NOISE_POINTS_PER_DECADE: usize = 400;

/// The fewest points of a band's integration grid, however narrow.
pub const MIN_NOISE_POINTS: usize = 64;

/// What makes a noise source.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum NoiseKind {
    /// A resistor's thermal noise.
    Thermal,
    /// An op-amp's input voltage noise.
    VoltageNoise,
    /// An op-amp's input current noise (both inputs).
    CurrentNoise,
}

impl std::fmt::Display for NoiseKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            NoiseKind::Thermal => "thermal noise",
            NoiseKind::VoltageNoise => "input voltage noise",
            NoiseKind::CurrentNoise => "input current noise",
        })
    }
}

/// One noise source of a circuit.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NoiseSource {
    /// The element's designator.
    pub designator: String,
    /// What kind of noise.
    pub kind: NoiseKind,
}

/// The output noise of a circuit over a grid.
#[derive(Debug, Clone, PartialEq)]
pub struct NoiseSpectrum {
    /// Frequencies, Hz, ascending, > 0.
    pub freq_hz: Vec<f64>,
    /// The sources, in netlist order (an op-amp's voltage noise before
    /// its current noise); those that reach the output with zero power
    /// everywhere are left out.
    pub sources: Vec<NoiseSource>,
    /// Output power density of each source at each frequency, V^2/Hz.
    pub source_v2_per_hz: Vec<Vec<f64>>,
    /// Their sum at each frequency, V^2/Hz.
    pub total_v2_per_hz: Vec<f64>,
}

/// What the noise of one element depends on, per frequency.
enum Generator {
    Resistor {
        a: Option<usize>,
        b: Option<usize>,
        g_s: f64,
    },
    OpAmp {
        row: usize,
        plus: Option<usize>,
        minus: Option<usize>,
    },
}

/// The output noise of `netlist` at node `out` over `freqs_hz` (> 0,
/// ascending), its resistors at `temperature_k` and every op-amp with
/// `opamp` noise.
pub fn output_noise(
    netlist: &Netlist,
    out: usize,
    freqs_hz: &[f64],
    opamp: &OpAmpNoise,
    temperature_k: f64,
) -> Result<NoiseSpectrum, AnalysisError> {
    if freqs_hz.is_empty() {
        return Err(AnalysisError::EmptyGrid {
            what: "noise frequency",
        });
    }
    if let Some(index) = (0..freqs_hz.len()).find(|&i| {
        let f = freqs_hz[i];
        !(f.is_finite() && f > 0.0) || (i > 0 && f <= freqs_hz[i - 1])
    }) {
        return Err(AnalysisError::Grid {
            index,
            freq_hz: freqs_hz[index],
        });
    }
    let mut system = AcSystem::new(netlist)?;
    let four_kt = 4.0 * BOLTZMANN_J_PER_K * temperature_k;
    let mut sources = Vec::new();
    let mut generators = Vec::new();
    for (index, element) in netlist.elements.iter().enumerate() {
        match *element {
            Element::Resistor {
                ref name,
                a,
                b,
                ohm,
            } => {
                sources.push(NoiseSource {
                    designator: name.clone(),
                    kind: NoiseKind::Thermal,
                });
                generators.push(Generator::Resistor {
                    a: system.unknown_of_node(a),
                    b: system.unknown_of_node(b),
                    g_s: 1.0 / ohm,
                });
            }
            Element::OpAmp {
                ref name,
                plus,
                minus,
                ..
            } => {
                for kind in [NoiseKind::VoltageNoise, NoiseKind::CurrentNoise] {
                    sources.push(NoiseSource {
                        designator: name.clone(),
                        kind,
                    });
                }
                generators.push(Generator::OpAmp {
                    row: system.opamp_row(index).expect("an op-amp has a gain row"),
                    plus: system.unknown_of_node(plus),
                    minus: system.unknown_of_node(minus),
                });
            }
            _ => {}
        }
    }
    let mut power = vec![vec![0.0; freqs_hz.len()]; sources.len()];
    let at = |y: &[Complex64], u: Option<usize>| u.map_or(Complex64::new(0.0, 0.0), |u| y[u]);
    let mut fill = |k: usize, y: &[Complex64]| {
        let f = freqs_hz[k];
        let mut s = 0;
        for g in &generators {
            match *g {
                Generator::Resistor { a, b, g_s } => {
                    power[s][k] = four_kt * g_s * (at(y, a) - at(y, b)).norm_sqr();
                    s += 1;
                }
                Generator::OpAmp { row, plus, minus } => {
                    power[s][k] = opamp.en2_at(f) * y[row].norm_sqr();
                    power[s + 1][k] =
                        opamp.in2_at(f) * (at(y, plus).norm_sqr() + at(y, minus).norm_sqr());
                    s += 2;
                }
            }
        }
    };
    let (lo, hi) = (freqs_hz[0], freqs_hz[freqs_hz.len() - 1]);
    match SparseAc::new(&system, lo, hi.max(lo * 1.0001)) {
        Ok(mut sparse) => sparse.adjoint_sweep(freqs_hz, out, &mut fill)?,
        Err(_) => {
            for (k, &f) in freqs_hz.iter().enumerate() {
                let y = system.output_adjoint(f, out)?.to_vec();
                fill(k, &y);
            }
        }
    }
    let keep: Vec<bool> = power.iter().map(|p| p.iter().any(|&v| v > 0.0)).collect();
    let mut kept = keep.iter();
    sources.retain(|_| *kept.next().unwrap_or(&false));
    let mut kept = keep.iter();
    power.retain(|_| *kept.next().unwrap_or(&false));
    let total = (0..freqs_hz.len())
        .map(|k| power.iter().map(|p| p[k]).sum())
        .collect();
    Ok(NoiseSpectrum {
        freq_hz: freqs_hz.to_vec(),
        sources,
        source_v2_per_hz: power,
        total_v2_per_hz: total,
    })
}

/// A log-spaced grid over `from_hz..=to_hz` for integrating noise:
/// [`NOISE_POINTS_PER_DECADE`], at least [`MIN_NOISE_POINTS`].
pub fn noise_band_grid(from_hz: f64, to_hz: f64) -> Vec<f64> {
    let decades = (to_hz / from_hz).log10();
    let points =
        ((decades * NOISE_POINTS_PER_DECADE as f64).ceil() as usize + 1).max(MIN_NOISE_POINTS);
    (0..points)
        .map(|k| from_hz * (to_hz / from_hz).powf(k as f64 / (points - 1) as f64))
        .collect()
}

/// The integral of a power density over its grid, by the trapezoidal
/// rule in ln f (the density times f is smooth in ln f, where the rule is
/// most accurate), each point weighted by `weight(f)` (a power weighting,
/// 1 for none): V^2 for V^2/Hz.
pub fn integrate(freq_hz: &[f64], density: &[f64], weight: impl Fn(f64) -> f64) -> f64 {
    freq_hz
        .windows(2)
        .zip(density.windows(2))
        .map(|(f, d)| {
            let (a, b) = (d[0] * f[0] * weight(f[0]), d[1] * f[1] * weight(f[1]));
            0.5 * (a + b) * (f[1] / f[0]).ln()
        })
        .sum()
}

/// The A-weighting of IEC 61672-1:2013 as a power factor (|R_A(f)|^2
/// normalized to 0 dB at 1 kHz): R_A(f) = 12194^2 f^4 / ((f^2 + 20.6^2)
/// sqrt((f^2 + 107.7^2)(f^2 + 737.9^2)) (f^2 + 12194^2)), A(f) = 20 log10
/// R_A(f) + 2.00 dB (from memory; the tests check the standard's tabled
/// values at 31.5 Hz, 1 kHz and 10 kHz, also from memory).
pub fn a_weighting(freq_hz: f64) -> f64 {
    let f2 = freq_hz * freq_hz;
    let ra = 12194f64.powi(2) * f2 * f2
        / ((f2 + 20.6f64.powi(2))
            * ((f2 + 107.7f64.powi(2)) * (f2 + 737.9f64.powi(2))).sqrt()
            * (f2 + 12194f64.powi(2)));
    ra * ra * 10f64.powf(2.0 / 10.0)
}

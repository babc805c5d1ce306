//! Frequency transformations (lowpass, highpass, bandpass, bandstop) and
//! impedance scaling of a normalized ladder into a netlist: the passive
//! ideal.
//!
//! Each normalized L or C (1 ohm, 1 rad/s) is replaced by the element or
//! pair its reactance becomes under the substitution for `s`, then scaled
//! by the source resistance R0 (L x R0, C / R0, R x R0). The substitutions
//! are the classical reactance transformations (common practice):
//!
//! | kind     | s becomes              | L becomes             | C becomes            |
//! |----------|------------------------|-----------------------|----------------------|
//! | lowpass  | s / wp                 | L                     | C                    |
//! | highpass | wp / s                 | C                     | L                    |
//! | bandpass | (s^2 + w0^2) / (B s)   | series L-C            | parallel L-C         |
//! | bandstop | B s / (s^2 + w0^2)     | parallel L-C          | series L-C           |
//!
//! with w0 = sqrt(w1 w2) and B = w2 - w1 for the band edges w1 < w2.
//!
//! The netlist follows the project's contract: an `AC 1` voltage source
//! drives node `in`, the source resistance runs from `in` into the ladder,
//! the load sits across node `out`, ground is `0`.

use crate::circuit::{CircuitError, Element, Netlist};
use crate::synth::{Ladder, Reactance};
use std::f64::consts::PI;

/// The frequency transformation to apply, with its edges in Hz.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Mapping {
    /// Passband edge, Hz.
    Lowpass(f64),
    /// Passband edge, Hz.
    Highpass(f64),
    /// Lower and upper passband edges, Hz.
    Bandpass(f64, f64),
    /// Lower and upper passband edges, Hz (the stopband lies between).
    Bandstop(f64, f64),
}

impl Mapping {
    /// The normalized lowpass frequency (rad/s) that a real frequency (Hz)
    /// maps to, as a magnitude: the inverse of the substitution for `s`
    /// on the jw axis. Used to carry a mask into the prototype.
    pub fn normalized(&self, f_hz: f64) -> f64 {
        match *self {
            Mapping::Lowpass(fp) => f_hz / fp,
            Mapping::Highpass(fp) => fp / f_hz,
            Mapping::Bandpass(f1, f2) => (f_hz * f_hz - f1 * f2).abs() / ((f2 - f1) * f_hz),
            Mapping::Bandstop(f1, f2) => (f2 - f1) * f_hz / (f_hz * f_hz - f1 * f2).abs(),
        }
    }
}

impl Mapping {
    /// The real frequencies (Hz, ascending) that map to the normalized
    /// frequency `w` > 0: one for lowpass and highpass, the pair around
    /// the geometric centre f0 for the band kinds (their product is f0^2).
    pub fn frequencies_hz(&self, w: f64) -> Vec<f64> {
        // Band kinds: f^2 - f0^2 = +-(B w) f (bandpass) or +-(B / w) f
        // (bandstop); the positive roots are f = (d + sqrt(d^2 + 4 f0^2)) / 2
        // and f0^2 divided by it.
        let pair = |f1: f64, f2: f64, d: f64| {
            let f0sq = f1 * f2;
            let hi = (d + (d * d + 4.0 * f0sq).sqrt()) / 2.0;
            vec![f0sq / hi, hi]
        };
        match *self {
            Mapping::Lowpass(fp) => vec![w * fp],
            Mapping::Highpass(fp) => vec![fp / w],
            Mapping::Bandpass(f1, f2) => pair(f1, f2, (f2 - f1) * w),
            Mapping::Bandstop(f1, f2) => pair(f1, f2, (f2 - f1) / w),
        }
    }
}

/// How one normalized reactance is realized after the transformation.
enum Realized {
    Single(Reactance, f64),
    Series { l: f64, c: f64 },
    Parallel { l: f64, c: f64 },
}

/// Transforms one normalized element of value `g` (henry or farad at 1
/// ohm, 1 rad/s) into scaled elements for source resistance `r0`.
fn realize(mapping: Mapping, kind: Reactance, g: f64, r0: f64) -> Realized {
    let rad = |f: f64| 2.0 * PI * f;
    match (mapping, kind) {
        (Mapping::Lowpass(fp), Reactance::Inductor) => {
            Realized::Single(Reactance::Inductor, g * r0 / rad(fp))
        }
        (Mapping::Lowpass(fp), Reactance::Capacitor) => {
            Realized::Single(Reactance::Capacitor, g / (r0 * rad(fp)))
        }
        // Impedance s g becomes wp g / s: a capacitor 1 / (wp g), and dually.
        (Mapping::Highpass(fp), Reactance::Inductor) => {
            Realized::Single(Reactance::Capacitor, 1.0 / (rad(fp) * g * r0))
        }
        (Mapping::Highpass(fp), Reactance::Capacitor) => {
            Realized::Single(Reactance::Inductor, r0 / (rad(fp) * g))
        }
        (Mapping::Bandpass(f1, f2), kind) | (Mapping::Bandstop(f1, f2), kind) => {
            let w0sq = rad(f1) * rad(f2);
            let b = rad(f2) - rad(f1);
            let bandpass = matches!(mapping, Mapping::Bandpass(..));
            match (bandpass, kind) {
                // g (s^2 + w0^2) / (B s) = s g/B + g w0^2 / (B s)
                (true, Reactance::Inductor) => Realized::Series {
                    l: g * r0 / b,
                    c: b / (g * w0sq * r0),
                },
                (true, Reactance::Capacitor) => Realized::Parallel {
                    l: b * r0 / (g * w0sq),
                    c: g / (b * r0),
                },
                // g B s / (s^2 + w0^2): its reciprocal is s/(gB) + w0^2/(gB s)
                (false, Reactance::Inductor) => Realized::Parallel {
                    l: g * b * r0 / w0sq,
                    c: 1.0 / (g * b * r0),
                },
                (false, Reactance::Capacitor) => Realized::Series {
                    l: r0 / (g * b),
                    c: g * b / (w0sq * r0),
                },
            }
        }
    }
}

/// Builds the netlist of the passive ideal: the normalized `ladder`
/// (source 1 ohm, edge 1 rad/s) transformed by `mapping` and scaled to
/// the source resistance `source_ohm`.
///
/// Nodes: `in` (source), `n1`.. for the ladder nodes, `out` for the load
/// node, `n<k>` for the inner node of each series pair.
pub fn passive_netlist(
    ladder: &Ladder,
    mapping: Mapping,
    source_ohm: f64,
    title: &str,
) -> Result<Netlist, CircuitError> {
    let mut net = Netlist::new(title);
    let vin = net.node("in");
    let nodes: Vec<usize> = (0..ladder.nodes)
        .map(|k| match k {
            0 => 0,
            k if k == ladder.output => net.node("out"),
            k => net.node(&format!("n{k}")),
        })
        .collect();
    net.add(Element::VoltageSource {
        name: "V1".to_string(),
        pos: vin,
        neg: 0,
        ac_volt: 1.0,
    })?;
    net.add(Element::Resistor {
        name: "RS".to_string(),
        a: vin,
        b: nodes[1],
        ohm: ladder.source_ohm * source_ohm,
    })?;
    let mut names = Names::default();
    for e in &ladder.elements {
        let (a, b) = (nodes[e.a], nodes[e.b]);
        match realize(mapping, e.kind, e.value, source_ohm) {
            Realized::Single(kind, v) => net.add(names.element(kind, a, b, v))?,
            Realized::Series { l, c } => {
                let mid = net.node(&format!("n{}", net.nodes.len()));
                net.add(names.element(Reactance::Inductor, a, mid, l))?;
                net.add(names.element(Reactance::Capacitor, mid, b, c))?
            }
            Realized::Parallel { l, c } => {
                net.add(names.element(Reactance::Inductor, a, b, l))?;
                net.add(names.element(Reactance::Capacitor, a, b, c))?
            }
        };
    }
    net.add(Element::Resistor {
        name: "RL".to_string(),
        a: nodes[ladder.output],
        b: 0,
        ohm: ladder.load_ohm * source_ohm,
    })?;
    Ok(net)
}

/// Numbers the inductors and capacitors in the order they are built.
#[derive(Default)]
struct Names {
    inductors: usize,
    capacitors: usize,
}

impl Names {
    fn element(&mut self, kind: Reactance, a: usize, b: usize, value: f64) -> Element {
        match kind {
            Reactance::Inductor => {
                self.inductors += 1;
                Element::Inductor {
                    name: format!("L{}", self.inductors),
                    a,
                    b,
                    henry: value,
                }
            }
            Reactance::Capacitor => {
                self.capacitors += 1;
                Element::Capacitor {
                    name: format!("C{}", self.capacitors),
                    a,
                    b,
                    farad: value,
                }
            }
        }
    }
}

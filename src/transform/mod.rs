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

use crate::circuit::{Element, Netlist};
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
pub fn passive_netlist(ladder: &Ladder, mapping: Mapping, source_ohm: f64, title: &str) -> Netlist {
    let mut b = Builder::new(title, ladder);
    let vin = b.node_named("in");
    b.push_source(vin);
    let first = b.ladder_node(1);
    b.push_resistor("RS", vin, first, ladder.source_ohm * source_ohm);
    for e in &ladder.elements {
        let (na, nb) = (b.ladder_node(e.a), b.ladder_node(e.b));
        match realize(mapping, e.kind, e.value, source_ohm) {
            Realized::Single(kind, v) => b.push_reactance(kind, na, nb, v),
            Realized::Series { l, c } => {
                let mid = b.internal_node();
                b.push_reactance(Reactance::Inductor, na, mid, l);
                b.push_reactance(Reactance::Capacitor, mid, nb, c);
            }
            Realized::Parallel { l, c } => {
                b.push_reactance(Reactance::Inductor, na, nb, l);
                b.push_reactance(Reactance::Capacitor, na, nb, c);
            }
        }
    }
    let out = b.ladder_node(ladder.output);
    b.push_resistor("RL", out, 0, ladder.load_ohm * source_ohm);
    b.netlist
}

/// Names nodes and elements while the netlist is built.
struct Builder {
    netlist: Netlist,
    /// Netlist index of each ladder node (ladder node 0 is ground).
    ladder_nodes: Vec<usize>,
    counts: [usize; 2],
}

impl Builder {
    fn new(title: &str, ladder: &Ladder) -> Builder {
        let mut netlist = Netlist {
            title: title.to_string(),
            nodes: vec!["0".to_string()],
            elements: Vec::new(),
        };
        let mut ladder_nodes = vec![0];
        for k in 1..ladder.nodes {
            let name = if k == ladder.output {
                "out".to_string()
            } else {
                format!("n{k}")
            };
            netlist.nodes.push(name);
            ladder_nodes.push(netlist.nodes.len() - 1);
        }
        Builder {
            netlist,
            ladder_nodes,
            counts: [0, 0],
        }
    }

    fn ladder_node(&self, k: usize) -> usize {
        self.ladder_nodes[k]
    }

    fn node_named(&mut self, name: &str) -> usize {
        self.netlist.nodes.push(name.to_string());
        self.netlist.nodes.len() - 1
    }

    fn internal_node(&mut self) -> usize {
        let name = format!("n{}", self.netlist.nodes.len());
        self.node_named(&name)
    }

    fn push_source(&mut self, pos: usize) {
        self.netlist.elements.push(Element::VoltageSource {
            name: "V1".to_string(),
            pos,
            neg: 0,
            ac_volt: 1.0,
        });
    }

    fn push_resistor(&mut self, name: &str, a: usize, b: usize, ohm: f64) {
        self.netlist.elements.push(Element::Resistor {
            name: name.to_string(),
            a,
            b,
            ohm,
        });
    }

    fn push_reactance(&mut self, kind: Reactance, a: usize, b: usize, value: f64) {
        let slot = kind as usize;
        self.counts[slot] += 1;
        let n = self.counts[slot];
        self.netlist.elements.push(match kind {
            Reactance::Inductor => Element::Inductor {
                name: format!("L{n}"),
                a,
                b,
                henry: value,
            },
            Reactance::Capacitor => Element::Capacitor {
                name: format!("C{n}"),
                a,
                b,
                farad: value,
            },
        });
    }
}

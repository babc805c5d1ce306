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

mod band;

pub use band::{
    check_levels, Band, Kind, MaskField, MaskProblem, FREQUENCY_RANGE_HZ, TERMINATION_RANGE_OHM,
};

use crate::circuit::{CircuitError, Element, Netlist};
use crate::synth::{Ladder, Reactance};
use std::f64::consts::PI;

/// How one normalized reactance is realized after the transformation.
enum Realized {
    Single(Reactance, f64),
    Series { l: f64, c: f64 },
    Parallel { l: f64, c: f64 },
}

/// Transforms one normalized element of value `g` (henry or farad at 1
/// ohm, 1 rad/s) into scaled elements for source resistance `r0`.
fn realize(band: Band, kind: Reactance, g: f64, r0: f64) -> Realized {
    let rad = |f: f64| 2.0 * PI * f;
    match (band, kind) {
        (
            Band::Lowpass {
                passband_edge_hz: fp,
                ..
            },
            Reactance::Inductor,
        ) => Realized::Single(Reactance::Inductor, g * r0 / rad(fp)),
        (
            Band::Lowpass {
                passband_edge_hz: fp,
                ..
            },
            Reactance::Capacitor,
        ) => Realized::Single(Reactance::Capacitor, g / (r0 * rad(fp))),
        // Impedance s g becomes wp g / s: a capacitor 1 / (wp g), and dually.
        (
            Band::Highpass {
                passband_edge_hz: fp,
                ..
            },
            Reactance::Inductor,
        ) => Realized::Single(Reactance::Capacitor, 1.0 / (rad(fp) * g * r0)),
        (
            Band::Highpass {
                passband_edge_hz: fp,
                ..
            },
            Reactance::Capacitor,
        ) => Realized::Single(Reactance::Inductor, r0 / (rad(fp) * g)),
        (
            Band::Bandpass {
                passband_edge_hz: [f1, f2],
                ..
            },
            kind,
        )
        | (
            Band::Bandstop {
                passband_edge_hz: [f1, f2],
                ..
            },
            kind,
        ) => {
            let w0sq = rad(f1) * rad(f2);
            let b = rad(f2) - rad(f1);
            let bandpass = matches!(band, Band::Bandpass { .. });
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
/// (source 1 ohm, edge 1 rad/s) transformed by the passband edges of
/// `band` and scaled to
/// the source resistance `source_ohm`.
///
/// Nodes: `in` (source), `n1`.. for the ladder nodes, `out` for the load
/// node, `n<k>` for the inner node of each series pair.
pub fn passive_netlist(
    ladder: &Ladder,
    band: Band,
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
        match realize(band, e.kind, e.value, source_ohm) {
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

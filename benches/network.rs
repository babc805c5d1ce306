//! The network every benchmark times: the 7th-order elliptic lowpass of
//! `examples/vibration-antialias.toml` (0.1 dB to 3 kHz, 70 dB from
//! 4.4 kHz) as a Bruton FDNR filter with single-pole op-amps.
//!
//! STAND-IN: until the active stage (`nocoil::active`) is merged, this
//! file applies the Bruton transformation itself to the library's passive
//! ladder (Bruton 1969, IEEE Trans. Circuit Theory 16: every impedance Z
//! becomes Z K / s, so R -> C = 1 / (K R), L -> R = K L, C -> FDNR with
//! D = C / K, and voltage ratios are unchanged). Each FDNR is an Antoniou
//! GIC with capacitors in positions 1 and 5: Zin = Z1 Z3 Z5 / (Z2 Z4) =
//! R3 / (s^2 C1 C5 R2 R4), so D = C1 C5 R2 R4 / R3. DC-path resistors Ra
//! across the source capacitor and Rb across the load capacitor follow
//! the field notes' rule Rb / (Ra + Rb + sum of series R) = RL / (RS + RL),
//! and a follower buffers `out`. Same size as the real build (7 op-amps,
//! 3 GICs), so the timings carry over; the numbers are re-measured once
//! the active stage replaces this.
//!
//! Shared by `benches/*.rs`, `examples/export_bench_deck.rs` and
//! `tests/fast.rs` through `#[path]`, so all time and check one network.

// Each includer uses a different part of this file.
#![allow(dead_code)]

use std::path::Path;

use nocoil::circuit::{AcSystem, Element, ElementKind, Netlist, OpAmpModel};
use nocoil::spec::Spec;

/// The op-amp of the benchmark: A0 = 1e5, GBW = 10 MHz.
pub const OPAMP: OpAmpModel = OpAmpModel::SinglePole {
    dc_gain: 1e5,
    gbw_hz: 10e6,
    output_ohm: 0.0,
};

/// The sweep benchmark's grid: 1,000 points, 44 Hz to 44 kHz, which is
/// ngspice's `.ac dec 333 44 44k` point for point (3 decades x 333 + 1).
pub const SWEEP: (f64, f64, usize) = (44.0, 44e3, 1000);

/// The Monte Carlo grid: 201 points, 440 Hz to 44 kHz (`.ac dec 100 440
/// 44k`), through the passband, the transition and the stopband.
pub const MONTE_CARLO: (f64, f64, usize) = (440.0, 44e3, 201);

/// Bruton's scaling constant K, 1/s: it maps the ladder's 1 kohm
/// terminations to 10 nF and its 4 to 92 mH inductors to 0.45 to 9.2
/// kohm.
const K: f64 = 1e5;

/// The GIC capacitors C1 = C5 and the balanced pair R2 = R3.
const GIC_C: f64 = 10e-9;
const GIC_R: f64 = 10e3;

/// The DC-path resistor across the source capacitor: its corner
/// 1 / (2 pi Ra CS) = 1.6 Hz sits far below the band.
const RA: f64 = 10e6;

/// The design file the network comes from.
const SPEC: &str = include_str!("../examples/vibration-antialias.toml");

/// The passive ideal ladder of the design file.
pub fn passive() -> Netlist {
    let spec = Spec::from_toml(Path::new("examples/vibration-antialias.toml"), SPEC)
        .expect("the example design file is valid");
    nocoil::design::design(&spec)
        .expect("the example designs")
        .passive
}

/// Adds an element built from its name and the two node names.
fn two(n: &mut Netlist, name: &str, a: &str, b: &str, value: f64) {
    let (a, b) = (n.node(a), n.node(b));
    let name = name.to_string();
    let element = match name.as_bytes()[0] {
        b'R' => Element::Resistor {
            name,
            a,
            b,
            ohm: value,
        },
        _ => Element::Capacitor {
            name,
            a,
            b,
            farad: value,
        },
    };
    n.add(element).expect("valid element");
}

fn opamp(n: &mut Netlist, name: &str, plus: &str, minus: &str, out: &str, model: OpAmpModel) {
    let (plus, minus, out) = (n.node(plus), n.node(minus), n.node(out));
    n.add(Element::OpAmp {
        name: name.to_string(),
        plus,
        minus,
        out,
        model,
    })
    .expect("valid op-amp");
}

/// An FDNR of value `d` from `top` to ground: GIC C1, R2, R3, R4, C5
/// with R4 = d R3 / (C1 C5 R2). Op-amp polarities: the field notes'
/// inductor arrangement with both op-amps' inputs swapped, the one of the
/// four whose natural frequencies all lie in the left half-plane with
/// the single-pole model (the others have roots near +3e7 1/s; checked
/// in `tests/fast.rs`).
fn fdnr(n: &mut Netlist, tag: &str, top: &str, d: f64, model: OpAmpModel) {
    let j: Vec<String> = (1..=4).map(|k| format!("{tag}j{k}")).collect();
    two(n, &format!("C{tag}a"), top, &j[0], GIC_C);
    two(n, &format!("R{tag}b"), &j[0], &j[1], GIC_R);
    two(n, &format!("R{tag}c"), &j[1], &j[2], GIC_R);
    two(n, &format!("R{tag}d"), &j[2], &j[3], d / (GIC_C * GIC_C));
    two(n, &format!("C{tag}e"), &j[3], "0", GIC_C);
    opamp(n, &format!("X{tag}1"), &j[1], top, &j[0], model);
    opamp(n, &format!("X{tag}2"), &j[3], &j[1], &j[2], model);
}

/// The value and nodes of the passive ladder's termination `name`.
fn termination(n: &Netlist, name: &str) -> (f64, usize, usize) {
    match n.elements.iter().find(|e| e.name() == name) {
        Some(&Element::Resistor { ohm, a, b, .. }) => (ohm, a, b),
        _ => panic!("the passive ladder has a resistor {name}"),
    }
}

/// Whether `node` is the inner end of a shunt arm (a capacitor to ground).
fn ends_on_capacitor(n: &Netlist, node: usize) -> bool {
    n.elements
        .iter()
        .any(|e| matches!(*e, Element::Capacitor { a, b: 0, .. } if a == node))
}

/// The FDNR network with every op-amp of the given model.
pub fn fdnr_lowpass(model: OpAmpModel) -> Netlist {
    let passive = passive();
    // The ladder's output becomes the buffer's input.
    let node = |i: usize| match passive.nodes[i].as_str() {
        "out" => "load".to_string(),
        other => other.to_string(),
    };
    let mut n = Netlist::new("nocoil benchmark: 7th-order elliptic FDNR lowpass (stand-in)");
    let inp = n.node("in");
    n.add(Element::VoltageSource {
        name: "V1".into(),
        pos: inp,
        neg: 0,
        ac_volt: 1.0,
    })
    .expect("source");
    let mut series_ohm = 0.0;
    for e in &passive.elements {
        match *e {
            Element::Resistor {
                ref name,
                a,
                b,
                ohm,
                ..
            } => two(
                &mut n,
                &format!("C{name}"),
                &node(a),
                &node(b),
                1.0 / (K * ohm),
            ),
            Element::Inductor {
                ref name,
                a,
                b,
                henry,
            } => {
                // Series arms carry the DC path; shunt arms end on an FDNR.
                if !ends_on_capacitor(&passive, b) {
                    series_ohm += K * henry;
                }
                two(&mut n, &format!("R{name}"), &node(a), &node(b), K * henry);
            }
            Element::Capacitor {
                ref name, a, farad, ..
            } => fdnr(
                &mut n,
                &name.replacen('C', "D", 1),
                &node(a),
                farad / K,
                model,
            ),
            Element::VoltageSource { .. } | Element::OpAmp { .. } => {}
        }
    }
    // Rb / (Ra + Rb + sum R) = RL / (RS + RL).
    let ((rs, a, b), (rl, ..)) = (termination(&passive, "RS"), termination(&passive, "RL"));
    let ratio = rl / (rs + rl);
    two(&mut n, "RA", &node(a), &node(b), RA);
    two(
        &mut n,
        "RB",
        "load",
        "0",
        ratio * (RA + series_ohm) / (1.0 - ratio),
    );
    opamp(&mut n, "XBUF", "load", "out", "out", model);
    n
}

/// SplitMix64 (Steele, Lea and Flood, "Fast splittable pseudorandom
/// number generators", OOPSLA 2014): seeded, reproducible draws.
pub struct SplitMix(pub u64);

impl SplitMix {
    pub fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1).
    pub fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Log-uniform in [lo, hi).
    pub fn spread(&mut self, lo: f64, hi: f64) -> f64 {
        lo * (hi / lo).powf(self.unit())
    }

    pub fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

/// The index and nominal value of every resistor and capacitor: the
/// parts a Monte Carlo trial draws.
pub fn parts(n: &Netlist) -> Vec<(usize, f64)> {
    n.elements
        .iter()
        .enumerate()
        .filter(|(_, e)| matches!(e.kind(), ElementKind::Resistor | ElementKind::Capacitor))
        .filter_map(|(i, e)| e.value().map(|v| (i, v)))
        .collect()
}

/// One trial: every part at its nominal value times 1 + tolerance u, u
/// uniform in [-1, 1).
pub fn perturb(system: &mut AcSystem, parts: &[(usize, f64)], tolerance: f64, rng: &mut SplitMix) {
    for &(index, nominal) in parts {
        let u = 2.0 * rng.unit() - 1.0;
        system
            .set_value(index, nominal * (1.0 + tolerance * u))
            .expect("a perturbed part stays positive");
    }
}

//! The network every benchmark times: the 7th-order elliptic lowpass of
//! `examples/vibration-antialias.toml` (0.1 dB to 3 kHz, 70 dB from
//! 4.4 kHz) as a Bruton FDNR filter (`nocoil::active`, method FDNR) with
//! single-pole op-amps, A0 = 1e5 and GBW = 10 MHz, balanced at the
//! passband edge.
//!
//! Shared by `benches/*.rs`, `examples/export_bench_deck.rs` and
//! `tests/fast.rs` through `#[path]`, so all time and check one network.

// Each includer uses a different part of this file.
#![allow(dead_code)]

use std::path::Path;

use nocoil::active::{self, Method, Options};
use nocoil::circuit::{AcSystem, ElementKind, Netlist, OpAmpModel};
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

/// Where the converters are balanced: the passband edge.
const BALANCE_HZ: f64 = 3000.0;

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

/// The FDNR network with every op-amp of the given model.
pub fn fdnr_lowpass(model: OpAmpModel) -> Netlist {
    let opts = Options {
        method: Method::Fdnr,
        opamp: model,
        ..Options::new(BALANCE_HZ)
    };
    active::realize(&passive(), &opts)
        .expect("the example lowpass has an FDNR build")
        .netlist
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

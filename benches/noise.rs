//! Noise and step response of the benchmark network (see `network.rs`,
//! the elliptic demo's FDNR build with single-pole op-amps):
//!
//! - `noise_1000`: the output noise of every resistor and op-amp over
//!   the sweep benchmark's 1,000 points (44 Hz to 44 kHz), the default
//!   op-amp noise, one adjoint solve per point ([`output_noise`], its
//!   set-up included). `benches/ngspice_side_by_side.sh` times ngspice's
//!   `.noise` on the same deck and grid; `noise_2` times the set-up
//!   alone (two points), so (t_1000 - t_2) / 998 is the cost per point
//!   on both sides.
//! - `step`: the step response's modes and figures to 0.01 % settling
//!   (the natural frequencies, [`step_modes`] and [`step_figures`]).

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use nocoil::analysis::{output_noise, step_figures, step_modes};
use nocoil::circuit::log_grid;
use nocoil::spec::DEFAULT_OPAMP_NOISE;
use std::hint::black_box;

#[path = "network.rs"]
mod network;

fn noise(c: &mut Criterion) {
    let netlist = network::fdnr_lowpass(network::OPAMP);
    let out = netlist.require_node("out").unwrap();
    let (from_hz, to_hz, points) = network::SWEEP;
    let freqs = log_grid(from_hz, to_hz, points).unwrap();
    // Two points: the set-up alone, which the side-by-side script takes
    // off as it takes ngspice's start and set-up off.
    let two = log_grid(from_hz, 10.0 * from_hz, 2).unwrap();
    let mut group = c.benchmark_group("noise");
    group.throughput(Throughput::Elements(points as u64));
    for (name, grid) in [("noise_1000", &freqs), ("noise_2", &two)] {
        group.bench_function(name, |b| {
            b.iter(|| {
                output_noise(&netlist, out, black_box(grid), &DEFAULT_OPAMP_NOISE, 300.0).unwrap()
            })
        });
    }
    group.finish();
    c.bench_function("step_to_0.01_percent", |b| {
        b.iter(|| {
            let roots = nocoil::active::natural_frequencies(black_box(&netlist)).unwrap();
            let modes = step_modes(&netlist, &roots).unwrap();
            step_figures(&modes, 0.5, None)
        })
    });
}

criterion_group!(benches, noise);
criterion_main!(benches);

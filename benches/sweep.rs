//! One AC sweep of 1,000 log-spaced points (44 Hz to 44 kHz) of the
//! 7th-order elliptic FDNR lowpass with single-pole op-amps (A0 1e5,
//! GBW 10 MHz): the sparse path ([`SparseAc`]) against the dense path
//! ([`AcSystem::sweep`]). Only the sweep is timed; both solvers are built
//! beforehand. `benches/ngspice_side_by_side.sh` runs ngspice on the same
//! deck and grid.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use nocoil::circuit::{log_grid, AcSystem, SparseAc};
use std::hint::black_box;

#[path = "network.rs"]
mod network;

fn sweep(c: &mut Criterion) {
    let netlist = network::fdnr_lowpass(network::OPAMP);
    let (out, inp) = (
        netlist.require_node("out").unwrap(),
        netlist.require_node("in").unwrap(),
    );
    let (from_hz, to_hz, points) = network::SWEEP;
    let freqs = log_grid(from_hz, to_hz, points).unwrap();
    let mut system = AcSystem::new(&netlist).unwrap();
    let mut sparse = SparseAc::new(&system, from_hz, to_hz).unwrap();
    let mut h = Vec::with_capacity(points);
    let mut group = c.benchmark_group("sweep_1000");
    group.throughput(Throughput::Elements(points as u64));
    group.bench_function("sparse", |b| {
        b.iter(|| {
            sparse
                .sweep_into(black_box(&freqs), out, inp, &mut h)
                .unwrap()
        })
    });
    group.bench_function("dense", |b| {
        b.iter(|| system.sweep(black_box(&freqs), out, inp).unwrap())
    });
    group.finish();
    eprintln!(
        "sparse solver: {:?}, {} dense fallbacks",
        sparse.stats(),
        sparse.fallbacks()
    );
}

criterion_group!(benches, sweep);
criterion_main!(benches);

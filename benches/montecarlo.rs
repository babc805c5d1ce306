//! A Monte Carlo of the 7th-order elliptic FDNR lowpass: 10,000 trials,
//! each drawing every resistor and capacitor uniformly within 1 % (seeded)
//! and sweeping 201 points (440 Hz to 44 kHz). Timed: the draws, the
//! refills (`AcSystem::set_value`, then `SparseAc::refill`) and the
//! sweeps, on one thread. The dense path runs 100 trials for the per-trial
//! comparison (10,000 would take about a minute per sample).
//!
//! `benches/ngspice_side_by_side.sh` scripts the same Monte Carlo in one
//! ngspice process.

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use nocoil::circuit::{log_grid, AcSystem, SparseAc};
use num_complex::Complex64;

#[path = "network.rs"]
mod network;

/// Trials of the sparse run, as the issue asks.
const TRIALS: usize = 10_000;
/// Trials of the dense run.
const DENSE_TRIALS: usize = 100;
/// Part tolerance, relative.
const TOLERANCE: f64 = 0.01;
/// The seed of the draws.
const SEED: u64 = 4;

fn montecarlo(c: &mut Criterion) {
    let netlist = network::fdnr_lowpass(network::OPAMP);
    let (out, inp) = (
        netlist.require_node("out").unwrap(),
        netlist.require_node("in").unwrap(),
    );
    let (from_hz, to_hz, points) = network::MONTE_CARLO;
    let freqs = log_grid(from_hz, to_hz, points).unwrap();
    let parts = network::parts(&netlist);
    let mut system = AcSystem::new(&netlist).unwrap();
    let mut sparse = SparseAc::new(&system, from_hz, to_hz).unwrap();
    let mut h: Vec<Complex64> = Vec::with_capacity(points);
    let mut group = c.benchmark_group("montecarlo_201");
    group.sample_size(10);
    // Ten samples of one to two seconds each.
    group.measurement_time(std::time::Duration::from_secs(20));
    group.throughput(Throughput::Elements(TRIALS as u64));
    group.bench_function("sparse_10000_trials", |b| {
        b.iter(|| {
            let mut rng = network::SplitMix(SEED);
            for _ in 0..TRIALS {
                network::perturb(&mut system, &parts, TOLERANCE, &mut rng);
                sparse.refill(&system).unwrap();
                sparse.sweep_into(&freqs, out, inp, &mut h).unwrap();
            }
        })
    });
    group.throughput(Throughput::Elements(DENSE_TRIALS as u64));
    group.bench_function("dense_100_trials", |b| {
        b.iter(|| {
            let mut rng = network::SplitMix(SEED);
            for _ in 0..DENSE_TRIALS {
                network::perturb(&mut system, &parts, TOLERANCE, &mut rng);
                system.sweep(&freqs, out, inp).unwrap();
            }
        })
    });
    group.finish();
    eprintln!("sparse dense fallbacks: {}", sparse.fallbacks());
}

criterion_group!(benches, montecarlo);
criterion_main!(benches);

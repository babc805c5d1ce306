//! The work of `nocoil sweep examples/vibration-antialias.toml` after the
//! design is made: the log grid, the passive ideal's trace with its exact
//! group delay, the active on parts build's trace, and the CSV table
//! (`export::sweep::sweep_table_csv`, which the command's
//! `write_sweep_csv` writes into a string), on the command's default band
//! (300 Hz to 44 kHz).
//!
//! - `table_N`: the whole table of N points; the difference of the
//!   20,000- and 2-point runs over 19,998 is the cost per point, as
//!   `benches/ngspice_side_by_side.sh` takes it for ngspice and for the
//!   command line (the fixed part, about 2 ms, is the solvers' set-up:
//!   pivot orders and the band scan; 20,000 points make the difference
//!   large beside the noise of either run, and fill several rounds of
//!   blocks of 4,096 rows).
//! - `passive_trace`, `active_trace`, `csv`: its three parts at 1,000
//!   points.
//!
//! All on rayon's global pool (a thread per core unless
//! RAYON_NUM_THREADS says otherwise).

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use nocoil::analysis::trace;
use nocoil::circuit::log_grid;
use nocoil::design::design;
use nocoil::export::csv::sweep_csv;
use nocoil::export::sweep::{sweep_table_csv, SWEEP_COLUMNS};
use nocoil::spec::Spec;
use std::hint::black_box;
use std::path::Path;

/// The demo the command line is timed on.
const SPEC: &str = include_str!("../examples/vibration-antialias.toml");

/// Points of the long table.
const POINTS: usize = 20_000;

/// Points of the parts.
const PART_POINTS: usize = 1000;

fn sweep_cli(c: &mut Criterion) {
    let spec = Spec::from_toml(Path::new("examples/vibration-antialias.toml"), SPEC)
        .expect("the example design file is valid");
    let d = design(&spec).expect("the example designs");
    let active = d
        .active()
        .expect("the example has active builds")
        .on_parts
        .netlist;
    let (lo, hi) = d.view_hz();
    let mut group = c.benchmark_group("sweep_cli");
    for points in [2, POINTS] {
        group.throughput(Throughput::Elements(points as u64));
        group.bench_function(format!("table_{points}"), |b| {
            b.iter(|| {
                let freqs = log_grid(lo, hi, points).unwrap();
                sweep_table_csv(&d.passive, &active, black_box(&freqs)).unwrap()
            })
        });
    }
    let freqs = log_grid(lo, hi, PART_POINTS).unwrap();
    group.throughput(Throughput::Elements(PART_POINTS as u64));
    group.bench_function("passive_trace", |b| {
        b.iter(|| trace(&d.passive, black_box(&freqs), true).unwrap())
    });
    group.bench_function("active_trace", |b| {
        b.iter(|| trace(&active, black_box(&freqs), false).unwrap())
    });
    let passive = trace(&d.passive, &freqs, true).unwrap();
    let active_trace = trace(&active, &freqs, false).unwrap();
    let delay = passive.group_delay_s.clone().unwrap();
    let columns: Vec<(&str, &[f64])> = SWEEP_COLUMNS
        .into_iter()
        .zip([
            &passive.gain_db[..],
            &passive.phase_deg,
            &delay,
            &active_trace.gain_db,
            &active_trace.phase_deg,
        ])
        .collect();
    group.bench_function("csv", |b| {
        b.iter(|| sweep_csv(black_box(&freqs), &columns).unwrap())
    });
    group.finish();
}

criterion_group!(benches, sweep_cli);
criterion_main!(benches);

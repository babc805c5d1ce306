//! The work of `nocoil sweep examples/vibration-antialias.toml` after the
//! design is made: the log grid, the passive ideal's trace with its exact
//! group delay, the traces of the active exact and active on parts builds
//! (`Design::sweep`), and the CSV table (`export::csv::sweep_csv`), on
//! the command's default band (300 Hz to 44 kHz).
//!
//! - `table_N`: the whole table of N points; the difference of the
//!   1,000- and 2-point runs over 998 is the cost per point, as
//!   `benches/ngspice_side_by_side.sh` takes it for ngspice and for the
//!   command line (the fixed part is the solvers' set-up: pivot orders
//!   and the band scan).
//! - `passive_trace`, `active_trace`, `csv`: its three parts at 1,000
//!   points.
//!
//! All on rayon's global pool (a thread per core unless
//! RAYON_NUM_THREADS says otherwise); at 1,000 points only the two
//! traces run side by side (a grid is split from 4,096 points, the
//! table's blocks hold 4,096 rows).

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use nocoil::analysis::trace;
use nocoil::circuit::log_grid;
use nocoil::design::design;
use nocoil::export::csv::sweep_csv;
use nocoil::spec::Spec;
use std::hint::black_box;
use std::path::Path;

/// The demo the command line is timed on.
const SPEC: &str = include_str!("../examples/vibration-antialias.toml");

/// Points of the long run.
const POINTS: usize = 1000;

fn sweep_cli(c: &mut Criterion) {
    let spec = Spec::from_toml(Path::new("examples/vibration-antialias.toml"), SPEC)
        .expect("the example design file is valid");
    let d = design(&spec).expect("the example designs");
    let builds = d.active().expect("the example has active builds");
    let active = builds.build.netlist.clone();
    let (lo, hi) = d.view_hz();
    let mut group = c.benchmark_group("sweep_cli");
    for points in [2, POINTS] {
        group.throughput(Throughput::Elements(points as u64));
        group.bench_function(format!("table_{points}"), |b| {
            b.iter(|| {
                let freqs = log_grid(lo, hi, points).unwrap();
                let table = d.sweep(&builds, black_box(&freqs)).unwrap();
                sweep_csv(&table.freq_hz, &table.named()).unwrap()
            })
        });
    }
    let freqs = log_grid(lo, hi, POINTS).unwrap();
    group.throughput(Throughput::Elements(POINTS as u64));
    group.bench_function("passive_trace", |b| {
        b.iter(|| trace(&d.passive, black_box(&freqs), true).unwrap())
    });
    group.bench_function("active_trace", |b| {
        b.iter(|| trace(&active, black_box(&freqs), false).unwrap())
    });
    let table = d.sweep(&builds, &freqs).unwrap();
    let columns = table.named();
    group.bench_function("csv", |b| {
        b.iter(|| sweep_csv(black_box(&freqs), &columns).unwrap())
    });
    group.finish();
}

criterion_group!(benches, sweep_cli);
criterion_main!(benches);

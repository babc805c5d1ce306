//! The design for yield's search (`[yield] target = 0.99`, the default
//! `max_extra_order` of 2) on the README demos and on a 9th-order
//! elliptic lowpass (1 kHz, 0.1 dB, 80 dB from 1.3 kHz, the minimum
//! order 9), each from the design file to the delivered design and its
//! active builds: what `nocoil design` spends before its analyses. The
//! issue's bound is 20 s on the 2-core machine; criterion's ten samples
//! of each take about a minute.

use std::path::Path;
use std::time::Duration;

use criterion::{criterion_group, criterion_main, Criterion};
use nocoil::design::design_for_yield;
use nocoil::spec::Spec;

/// The 9th-order elliptic lowpass.
const ELLIPTIC_9: &str = r#"[filter]
kind = "lowpass"
family = "elliptic"
passband_edge_hz = 1000.0
stopband_edge_hz = 1300.0
passband_ripple_db = 0.1
stopband_attenuation_db = 80.0

[terminations]
source_ohm = 1000.0
load_ohm = 1000.0

[yield]
target = 0.99
"#;

/// The README demos (the table demo has a prototype table, which fixes
/// its ladder: nothing to search).
const DEMOS: [&str; 5] = [
    "birdsong-bandpass.toml",
    "mains-notch.toml",
    "vibration-antialias.toml",
    "rumble-highpass.toml",
    "echo-timing-bessel.toml",
];

fn search(c: &mut Criterion) {
    // The demos' design files have their own [yield] tables.
    let mut specs: Vec<(String, Spec)> = DEMOS
        .iter()
        .map(|file| {
            let spec = Spec::load(&Path::new("examples").join(file)).unwrap();
            assert!(spec.yield_goal.is_some(), "{file}: no [yield] table");
            (file.to_string(), spec)
        })
        .collect();
    specs.push((
        "elliptic-9-lowpass".to_string(),
        Spec::from_toml(Path::new("elliptic-9.toml"), ELLIPTIC_9).unwrap(),
    ));
    let mut group = c.benchmark_group("design_for_yield");
    group.sample_size(10);
    group.measurement_time(Duration::from_secs(60));
    for (name, spec) in &specs {
        group.bench_function(name.as_str(), |b| {
            b.iter(|| design_for_yield(spec, None).unwrap())
        });
    }
    group.finish();
}

criterion_group!(benches, search);
criterion_main!(benches);

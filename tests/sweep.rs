//! The sweep path of `nocoil sweep` (`analysis::trace` over `SparseAc`
//! and `DenseDelay`, the table of `export::csv::sweep_csv`) against the
//! dense path it replaced, which stays the oracle: `AcSystem::transfer`
//! read by `Response::db` and `Response::phase_deg`, and
//! `AcSystem::group_delay`.

use std::f64::consts::TAU;
use std::path::Path;

use nocoil::analysis::{trace, Trace, ZERO_GAIN_DB};
use nocoil::circuit::{log_grid, AcSystem, DenseDelay, Element, Netlist, SparseAc};
use nocoil::design::{design, Design};
use nocoil::export::sweep::{sweep_table_csv, SWEEP_COLUMNS};
use nocoil::spec::Spec;

use crate::fast::{cascade, extended_log_derivative, tolerance, Models};

/// Gain agreement with the dense path, dB: the brief's bound. The two
/// solve the same equations with different pivots, so they differ by a
/// few eps times the growth and the condition of the answer (1e-12
/// relative on the random cascades of `tests/fast.rs`, about 1e-11 dB).
const GAIN_TOL_DB: f64 = 1e-9;

/// Phase agreement, degrees: the relative error of H that keeps the gain
/// within [`GAIN_TOL_DB`] (1e-9 / (20 / ln 10) = 1.15e-10) moves its
/// argument by at most that many radians, 6.6e-9 degrees.
const PHASE_TOL_DEG: f64 = 6.6e-9;

/// Group delay agreement, relative: the brief's bound. The delay is the
/// real part of d ln H / ds, whose two terms each carry the solves'
/// relative error.
const DELAY_REL_TOL: f64 = 1e-9;

/// Far above the band the delay falls by cancellation of its two terms,
/// which stay near the size of the peak delay (mains notch, passive
/// ideal: 2.1e-9 s at 114 kHz against a peak of milliseconds, agreeing
/// to 1.4e-9 relative, 3e-18 s): there the bound is relative to this
/// fraction of the trace's peak delay instead of the value itself.
const DELAY_FLOOR_OF_PEAK: f64 = 1e-3;

/// Points of the demo grids over the default band (a decade either side
/// of the edges): about the command's default (401), and more. Even
/// counts: an odd count puts the middle point exactly at the geometric
/// centre of the band, which for the bandstop demo (`mains-notch`) is
/// its centre frequency, where the passive ideal's equations are
/// numerically singular to both paths (`nocoil sweep` of that demo at
/// the default 401 points fails there, before this path as after).
///
/// Finer grids come closer to the transmission zeros, where no double
/// solve holds the delay to 1e-9: measured at 20,000 points, three
/// points of `mains-notch`'s passive ideal within 0.03 % of its zeros
/// (gain -103 to -113 dB) differ from the dense path by up to 7.3e-8
/// relative, and against a double-double solve the sparse path is off
/// by at most 4.1e-9 there and the dense path by up to 6.9e-8; both are
/// within the conditioning bound the random-cascade test below uses.
const DEMO_POINTS: [usize; 2] = [400, 2_000];

/// Every demo design of `examples/`, with its active build's netlist.
fn demos() -> Vec<(String, Design, Netlist)> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut paths: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().and_then(|e| e.to_str()) == Some("toml"))
        .collect();
    paths.sort();
    paths
        .into_iter()
        .map(|path| {
            let spec = Spec::load(&path).unwrap_or_else(|e| panic!("{e}"));
            let d = design(&spec).unwrap_or_else(|e| panic!("{e}"));
            let active = d.active().unwrap_or_else(|e| panic!("{e}")).build.netlist;
            (path.display().to_string(), d, active)
        })
        .collect()
}

/// The dense path's gain, phase and (with `with_delay`) group delay.
fn dense(netlist: &Netlist, freqs: &[f64], with_delay: bool) -> Trace {
    let (inp, out) = (
        netlist.require_node("in").unwrap(),
        netlist.require_node("out").unwrap(),
    );
    let mut system = AcSystem::new(netlist).unwrap();
    let response = system.sweep(freqs, out, inp).unwrap();
    let delay = with_delay.then(|| {
        freqs
            .iter()
            .map(|&f| system.group_delay(f, out, inp).unwrap())
            .collect()
    });
    Trace {
        gain_db: response.db(),
        phase_deg: response.phase_deg(),
        group_delay_s: delay,
    }
}

/// `got` against the dense `want`, point by point, within the bounds.
fn assert_agrees(got: &Trace, want: &Trace, freqs: &[f64], context: &str) {
    for (i, &f) in freqs.iter().enumerate() {
        let (g, w) = (got.gain_db[i], want.gain_db[i]);
        assert!(
            (g - w).abs() <= GAIN_TOL_DB,
            "{context}: {f} Hz gain {g} dB, dense {w} dB"
        );
        let (g, w) = (got.phase_deg[i], want.phase_deg[i]);
        assert!(
            (g - w).abs() <= PHASE_TOL_DEG,
            "{context}: {f} Hz phase {g} deg, dense {w} deg"
        );
    }
    match (&got.group_delay_s, &want.group_delay_s) {
        (Some(got), Some(want)) => {
            let peak = want.iter().map(|w| w.abs()).fold(0.0, f64::max);
            for ((f, g), w) in freqs.iter().zip(got).zip(want) {
                assert!(
                    (g - w).abs() <= DELAY_REL_TOL * w.abs().max(DELAY_FLOOR_OF_PEAK * peak),
                    "{context}: {f} Hz delay {g} s, dense {w} s"
                );
            }
        }
        (None, None) => {}
        _ => panic!("{context}: delay asked of one path only"),
    }
}

#[test]
fn trace_agrees_with_the_dense_path_on_the_demos() {
    for (name, d, active) in demos() {
        let (lo, hi) = d.view_hz();
        for points in DEMO_POINTS {
            let freqs = log_grid(lo, hi, points).unwrap();
            for (build, netlist) in [("passive", &d.passive), ("active", &active)] {
                for with_delay in [false, true] {
                    let got = trace(netlist, &freqs, with_delay).unwrap();
                    let want = dense(netlist, &freqs, with_delay);
                    let context = format!("{name} {build}, {points} points, delay {with_delay}");
                    assert_agrees(&got, &want, &freqs, &context);
                }
            }
        }
    }
}

/// `nocoil sweep` prints the table the dense path gives: the header of
/// before, and every value within the bounds above (the numbers are
/// written to round-trip, so the bounds are those of the solve).
#[test]
fn sweep_command_prints_the_dense_values() {
    let spec = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/vibration-antialias.toml");
    let run = std::process::Command::new(env!("CARGO_BIN_EXE_nocoil"))
        .args(["sweep", spec.to_str().unwrap(), "--points", "301"])
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    // The example has a [yield] table: the command sweeps the delivered
    // design of its search.
    let (d, a) = nocoil::design::design_for_yield(&Spec::load(&spec).unwrap(), None).unwrap();
    let on_parts = a.on_parts.netlist;
    let (lo, hi) = d.view_hz();
    let freqs = log_grid(lo, hi, 301).unwrap();
    let mut reader = csv::Reader::from_reader(run.stdout.as_slice());
    assert_eq!(
        reader.headers().unwrap().iter().collect::<Vec<_>>(),
        [
            "freq_hz",
            "passive_ideal_gain_db",
            "passive_ideal_phase_deg",
            "passive_ideal_group_delay_s",
            "active_on_parts_gain_db",
            "active_on_parts_phase_deg"
        ]
    );
    let rows: Vec<Vec<f64>> = reader
        .records()
        .map(|r| r.unwrap().iter().map(|x| x.parse().unwrap()).collect())
        .collect();
    let column = |k: usize| rows.iter().map(|r| r[k]).collect::<Vec<f64>>();
    assert_eq!(column(0), freqs, "the grid, exactly");
    let printed = |db, phase, delay: Option<usize>| Trace {
        gain_db: column(db),
        phase_deg: column(phase),
        group_delay_s: delay.map(column),
    };
    let context = "nocoil sweep";
    assert_agrees(
        &printed(1, 2, Some(3)),
        &dense(&d.passive, &freqs, true),
        &freqs,
        context,
    );
    assert_agrees(
        &printed(4, 5, None),
        &dense(&on_parts, &freqs, false),
        &freqs,
        context,
    );
}

/// Sparse group delay against the delay solved in double-double, on the
/// random op-amp cascades of `tests/fast.rs`. The delay is the real part
/// of L = d ln H / ds = (dV(out)/ds) / V(out) - (dV(in)/ds) / V(in),
/// each solved with one set of factors, so its error is bounded by the
/// relative error of those solves times |L| (not times |Re L|: where the
/// delay is small beside |L|, fewer of its digits survive in any double
/// solve). The bound on that relative error is the one `tests/fast.rs`
/// gives the sparse transfer (`tolerance`: 1e-12, or 3 n eps times the
/// componentwise condition of V(out) where that is larger). Measured: at
/// most 0.42 of it here. `AcSystem::group_delay` exceeds it up to 134
/// times (Mixed seed 12, 40 Hz to 1 kHz: 2.5e-8 off relative to the
/// delay, the sparse path 2e-15), so the dense path is no oracle for
/// these networks; the demos above are compared with it.
#[test]
fn sparse_group_delay_matches_an_extended_solve_on_random_cascades() {
    let freqs = log_grid(1.0, 1e7, 36).unwrap();
    let (mut points, mut fallbacks) = (0, 0);
    for models in [Models::Ideal, Models::SinglePole, Models::Mixed] {
        for seed in 1..=12 {
            let netlist = cascade(seed, 8, models);
            let (out, inp) = (
                netlist.require_node("out").unwrap(),
                netlist.require_node("in").unwrap(),
            );
            let system = AcSystem::new(&netlist).unwrap();
            let mut sparse = SparseAc::new(&system, 1.0, 1e7).unwrap();
            let (mut h, mut delay) = (Vec::new(), Vec::new());
            sparse
                .sweep_delay_into(&freqs, out, inp, &mut h, &mut delay)
                .unwrap();
            for (k, &f) in freqs.iter().enumerate() {
                let context = format!("{models:?} seed {seed}, {f} Hz");
                let l = extended_log_derivative(&system, f, out, inp);
                let tol = tolerance(&system, f, out) * l.norm();
                assert!(
                    (delay[k] + l.re).abs() <= tol,
                    "{context}: delay {} s, extended {} s, tolerance {tol} s",
                    delay[k],
                    -l.re,
                );
                let (h1, d1) = sparse.transfer_delay(f, out, inp).unwrap();
                assert_eq!((h1, d1), (h[k], delay[k]), "{context}: one point");
                assert_eq!(h1, sparse.transfer(f, out, inp).unwrap(), "{context}");
            }
            points += freqs.len();
            fallbacks += sparse.fallbacks();
        }
    }
    // The sparse derivative solve must be what agreed, not the dense
    // fallback (each point above was solved three times).
    assert!(fallbacks * 100 <= 3 * points, "{fallbacks} fallbacks");
}

#[test]
fn dense_delay_is_acsystem_bit_for_bit() {
    let netlist = cascade(5, 8, Models::Mixed);
    let (out, inp) = (
        netlist.require_node("out").unwrap(),
        netlist.require_node("in").unwrap(),
    );
    let mut system = AcSystem::new(&netlist).unwrap();
    let mut dense = DenseDelay::new(&system);
    for f in log_grid(1.0, 1e7, 29).unwrap() {
        let (h, delay) = dense.transfer_delay(&system, f, out, inp).unwrap();
        assert_eq!(h, system.transfer(f, out, inp).unwrap(), "{f} Hz");
        assert_eq!(delay, system.group_delay(f, out, inp).unwrap(), "{f} Hz");
    }
}

/// V1 drives `in`; C1 from `in` to `out`, R1 from `out` to ground:
/// H(s) = sRC / (1 + sRC), exactly zero at DC.
fn rc_highpass(ohm: f64, farad: f64) -> Netlist {
    let mut n = Netlist::new("RC highpass");
    let (inp, out) = (n.node("in"), n.node("out"));
    for e in [
        Element::VoltageSource {
            name: "V1".into(),
            pos: inp,
            neg: 0,
            ac_volt: 1.0,
        },
        Element::Capacitor {
            name: "C1".into(),
            a: inp,
            b: out,
            farad,
        },
        Element::Resistor {
            name: "R1".into(),
            a: out,
            b: 0,
            ohm,
        },
    ] {
        n.add(e).unwrap();
    }
    n
}

/// At the exact zero of H at DC the delay is its limit, RC: the delay of
/// sRC / (1 + sRC) is RC / (1 + (wRC)^2) on either side (closed form).
#[test]
fn delay_at_an_exact_zero_is_its_limit() {
    let (r, c) = (1e3, 1e-6);
    let tau = r * c;
    let netlist = rc_highpass(r, c);
    let freqs = [0.0, 1e-3, 1.0, 100.0, 1e4];
    let t = trace(&netlist, &freqs, true).unwrap();
    let delay = t.group_delay_s.as_deref().unwrap();
    for (&f, &d) in freqs.iter().zip(delay) {
        let want = tau / (1.0 + (TAU * f * tau).powi(2));
        // A first-order network solved in a few operations: a few eps.
        assert!(
            (d - want).abs() <= 1e-14 * want,
            "{f} Hz: {d} s, want {want} s"
        );
    }
    assert_eq!(t.gain_db[0], ZERO_GAIN_DB, "H = 0 at DC");
    let all = [&t.gain_db, &t.phase_deg, delay];
    assert!(all.iter().all(|v| v.iter().all(|x| x.is_finite())), "{t:?}");
    // The dense path gives the same limit where SparseAc cannot be built
    // (a grid of DC alone has no span), and the oracle reports the zero.
    let (out, inp) = (netlist.require_node("out").unwrap(), 1);
    let mut system = AcSystem::new(&netlist).unwrap();
    let (h, d) = DenseDelay::new(&system)
        .transfer_delay(&system, 0.0, out, inp)
        .unwrap();
    assert_eq!(h, num_complex::Complex64::new(0.0, 0.0));
    assert!((d - tau).abs() <= 1e-14 * tau, "{d}");
    assert!(system.group_delay(0.0, out, inp).is_err());
    let dc = trace(&netlist, &[0.0], true).unwrap();
    assert_eq!(dc.group_delay_s, Some(vec![d]));
    assert_eq!(dc.gain_db, vec![ZERO_GAIN_DB]);
}

/// The 6th-order Chebyshev highpass demo has a zero of order 6 at DC:
/// H = K s^6 / D(s), whose delay Re(D'/D)(j w) is even in w, so the limit
/// at DC is the delay at a frequency far below the band to second order
/// in w (at 1e-5 times the 60 Hz edge, (w tau)^2 is about 2e-10).
#[test]
fn delay_at_a_multiple_zero_is_its_limit() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/rumble-highpass.toml");
    let d = design(&Spec::load(&path).unwrap()).unwrap();
    let freqs = [0.0, 6e-4];
    let t = trace(&d.passive, &freqs, true).unwrap();
    let delay = t.group_delay_s.unwrap();
    assert!(
        (delay[0] - delay[1]).abs() <= 1e-8 * delay[1].abs(),
        "{delay:?}"
    );
    assert_eq!(t.gain_db[0], ZERO_GAIN_DB);
}

/// A long sweep is split over rayon's threads (one solver copy per
/// part): the trace is the same, bit for bit, on one, two and three.
#[test]
fn trace_is_the_same_on_any_thread_count() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/vibration-antialias.toml");
    let d = design(&Spec::load(&path).unwrap()).unwrap();
    let active = d.active().unwrap().build.netlist;
    let (lo, hi) = d.view_hz();
    let freqs = log_grid(lo, hi, 20_001).unwrap();
    let on = |threads: usize, netlist: &Netlist, with_delay: bool| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| trace(netlist, &freqs, with_delay).unwrap())
    };
    for (netlist, with_delay) in [(&d.passive, true), (&active, false)] {
        let one = on(1, netlist, with_delay);
        assert_eq!(one, on(2, netlist, with_delay));
        assert_eq!(one, on(3, netlist, with_delay));
    }
}

/// The command's table, made and written block by block, is the text
/// `export::csv::sweep_csv` makes of the two whole traces, on any thread
/// count (20,001 rows: several rounds of blocks, the last one short).
#[test]
fn sweep_table_is_the_traces_written_whole() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/vibration-antialias.toml");
    let d = design(&Spec::load(&path).unwrap()).unwrap();
    let active = d.active().unwrap().on_parts.netlist;
    let (lo, hi) = d.view_hz();
    let freqs = log_grid(lo, hi, 20_001).unwrap();
    let passive_trace = trace(&d.passive, &freqs, true).unwrap();
    let active_trace = trace(&active, &freqs, false).unwrap();
    let delay = passive_trace.group_delay_s.clone().unwrap();
    let columns: Vec<(&str, &[f64])> = SWEEP_COLUMNS
        .into_iter()
        .zip([
            &passive_trace.gain_db[..],
            &passive_trace.phase_deg,
            &delay,
            &active_trace.gain_db,
            &active_trace.phase_deg,
        ])
        .collect();
    let whole = nocoil::export::csv::sweep_csv(&freqs, &columns).unwrap();
    for threads in [1, 2, 3] {
        let table = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| sweep_table_csv(&d.passive, &active, &freqs).unwrap());
        assert!(table == whole, "{threads} threads: the table differs");
    }
}

#[test]
fn trace_refuses_bad_grids_and_takes_empty_ones() {
    let netlist = rc_highpass(1e3, 1e-6);
    assert!(trace(&netlist, &[10.0, 1.0], false).is_err());
    assert!(trace(&netlist, &[-1.0], true).is_err());
    let empty = trace(&netlist, &[], true).unwrap();
    assert!(empty.gain_db.is_empty() && empty.group_delay_s == Some(vec![]));
    // A netlist without `in` and `out` is refused by name.
    let mut other = Netlist::new("no ports");
    other.node("a");
    assert!(trace(&other, &[1.0], false).is_err());
}

/// A resistive divider with an L-C pair in series hung from `out` back to
/// `out` through node `x`: at 1/(2 pi sqrt(LC)) a current can circulate
/// in the pair with every node voltage unchanged, so the circuit
/// equations are singular there, while V(out)/V(in) is 1/2 at every
/// frequency (closed form) and its delay 0.
fn divider_with_a_resonant_loop(henry: f64, farad: f64) -> Netlist {
    let mut n = rc_highpass(1e3, 1e-6);
    n.elements.clear();
    let (inp, out, x) = (n.node("in"), n.node("out"), n.node("x"));
    for e in [
        Element::VoltageSource {
            name: "V1".into(),
            pos: inp,
            neg: 0,
            ac_volt: 1.0,
        },
        Element::Resistor {
            name: "R1".into(),
            a: inp,
            b: out,
            ohm: 1e3,
        },
        Element::Resistor {
            name: "R2".into(),
            a: out,
            b: 0,
            ohm: 1e3,
        },
        Element::Inductor {
            name: "L1".into(),
            a: out,
            b: x,
            henry,
        },
        Element::Capacitor {
            name: "C1".into(),
            a: x,
            b: out,
            farad,
        },
    ] {
        n.add(e).unwrap();
    }
    n
}

#[test]
fn a_grid_point_on_a_lossless_resonance_gets_the_transfer_there() {
    // The resonance of the loop is a grid point (L = 1 H, C = 1/(2 pi
    // 50)^2 F, so f0 = 50 Hz up to rounding). The dense path, the sparse
    // trace and the dense delay all give H = 1/2 (closed form) and delay 0
    // there, to 1e-9 and 1e-12 s; before, each failed with "singular".
    let netlist = divider_with_a_resonant_loop(1.0, 1.0 / (TAU * 50.0).powi(2));
    let freqs = [10.0, 50.0, 200.0];
    let (out, inp) = (
        netlist.node_index("out").unwrap(),
        netlist.node_index("in").unwrap(),
    );
    let mut system = AcSystem::new(&netlist).unwrap();
    let mut dense_delay = DenseDelay::new(&system);
    for &f in &freqs {
        let h = system.transfer(f, out, inp).unwrap();
        let (hd, delay) = dense_delay.transfer_delay(&system, f, out, inp).unwrap();
        assert!(
            (h - 0.5).norm() < 1e-9 && (hd - 0.5).norm() < 1e-9 && delay.abs() < 1e-12,
            "{f} Hz: {h}, {hd}, delay {delay}"
        );
    }
    let t = trace(&netlist, &freqs, true).unwrap();
    for (k, f) in freqs.iter().enumerate() {
        let delay = t.group_delay_s.as_ref().unwrap()[k];
        assert!(
            (t.gain_db[k] + 20.0 * 2f64.log10()).abs() < 1e-8 && delay.abs() < 1e-12,
            "trace at {f} Hz: {} dB, delay {delay}",
            t.gain_db[k]
        );
    }
}

#[test]
fn the_mains_notch_swept_through_its_exact_centre() {
    // A sweep from 20 to 120 Hz in three points holds the notch centre
    // sqrt(20 * 120) = 48.98979485566357 Hz (the grid of the example's
    // default sweep held it too before the view reached the top of the
    // op-amp range), where the passive ideal's lossless tanks resonate:
    // the sweep command must exit 0 with every value finite. There the transfer of this 3rd-order elliptic
    // bandstop is exactly zero: the prototype's transmission zero at
    // infinity (odd order) maps to the centre (scipy.signal's lp2bs gives
    // the numerator its surplus degree as factors s^2 + w0^2: common
    // practice). nocoil gives the mean of the two sides at 1e-5
    // relative, which must lie below -200 dB, while 0.1 % away the
    // passive ideal is at its smooth value (the same points solved
    // without the centre in the grid agree to 1e-6 dB).
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/mains-notch.toml");
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_nocoil"))
        .args(["sweep", path.to_str().unwrap()])
        .args(["--from", "20", "--to", "120", "--points", "3"])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success() && !text.contains("inf") && !text.contains("NaN"),
        "status {:?}: {}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
    let f0 = (40.0f64 * 60.0).sqrt();
    let centre = text.lines().nth(2).and_then(|l| l.split(',').next());
    let f: f64 = centre.unwrap().parse().unwrap();
    assert!((f / f0 - 1.0).abs() < 1e-15, "grid centre {f} Hz");
    let d = design(&Spec::load(&path).unwrap()).unwrap();
    let t = trace(&d.passive, &[f0 * 0.999, f0, f0 * 1.001], true).unwrap();
    assert!(t.gain_db[1] < -200.0, "centre: {} dB", t.gain_db[1]);
    let apart = trace(&d.passive, &[f0 * 0.999, f0 * 1.001], true).unwrap();
    for (k, j) in [(0, 0), (2, 1)] {
        assert!(
            (t.gain_db[k] - apart.gain_db[j]).abs() < 1e-6,
            "{} vs {}",
            t.gain_db[k],
            apart.gain_db[j]
        );
    }
}

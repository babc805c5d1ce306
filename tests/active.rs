//! Tests of active: the GIC two-port against its closed form, every
//! realization with ideal op-amps against the passive ideal and the scipy
//! reference, every exported active deck against ngspice, and the
//! stability verdicts against ngspice step responses.

use std::path::Path;

use num_complex::Complex64;

use crate::scipy_cases::{fixture, Case, REFERENCE_FLOOR_DB};
use crate::util::{assert_close_response, ngspice_ac, ngspice_tran};
use nocoil::active::gic::{place_gic, Impedance, Placed};
use nocoil::active::{
    deviation_db, is_stable, realize, ActiveBuild, ActiveError, Method, Options, Refine, StageKind,
};
use nocoil::circuit::{log_grid, AcSystem, CircuitError, Element, Netlist, OpAmpModel};
use nocoil::design::{design, Design};
use nocoil::export::spice::{deck, step_deck, AcSweep, StepResponse};
use nocoil::spec::Spec;

/// The project's end-to-end budget (as in tests/design.rs): an active
/// network with ideal op-amps must equal the passive ideal, and any deck
/// must agree with ngspice, to 0.01 dB wherever the response is above
/// REFERENCE_FLOOR_DB.
const ACTIVE_TOL_DB: f64 = 0.01;
/// The same 1.2e-3 relative error as 0.01 dB, as a phase: 0.066 degree.
const ACTIVE_TOL_DEG: f64 = 0.066;

/// The single-pole op-amps (A0 = 1e5) of this file's stability and
/// accuracy checks.
fn single_pole(gbw_hz: f64) -> OpAmpModel {
    OpAmpModel::SinglePole {
        dc_gain: 1e5,
        gbw_hz,
        output_ohm: 0.0,
    }
}

/// V(out)/V(in) of a netlist.
fn transfer(netlist: &Netlist, freqs: &[f64]) -> Vec<Complex64> {
    let (out, inp) = (
        netlist.node_index("out").unwrap(),
        netlist.node_index("in").unwrap(),
    );
    AcSystem::new(netlist)
        .unwrap()
        .sweep(freqs, out, inp)
        .unwrap()
        .h
}

fn db(h: Complex64) -> f64 {
    20.0 * h.norm().log10()
}

// --- the GIC two-port --------------------------------------------------

/// Z(s) of one chain impedance.
fn z_of(z: Impedance, s: Complex64) -> Complex64 {
    match z {
        Impedance::Resistor(ohm) => Complex64::new(ohm, 0.0),
        Impedance::Capacitor(farad) => 1.0 / (s * farad),
    }
}

/// `in` -(R sense)- `out` = port 1 of a GIC with ideal op-amps, Z5 from
/// port 2 to ground.
fn gic_divider(z: [Impedance; 5], r_sense: f64) -> Netlist {
    let mut n = Netlist::new("GIC two-port");
    let (inp, out) = (n.node("in"), n.node("out"));
    let source = Element::VoltageSource {
        name: "V1".into(),
        pos: inp,
        neg: 0,
        ac_volt: 1.0,
    };
    n.add(source).unwrap();
    let sense = Element::Resistor {
        name: "RSENSE".into(),
        a: inp,
        b: out,
        ohm: r_sense,
    };
    n.add(sense).unwrap();
    let chain = [z[0], z[1], z[2], z[3]];
    let mut placed = Placed::default();
    let port2 = place_gic(&mut n, "G", out, &chain, OpAmpModel::Ideal, &mut placed).unwrap();
    let load = match z[4] {
        Impedance::Resistor(ohm) => Element::Resistor {
            name: "R5".into(),
            a: port2,
            b: 0,
            ohm,
        },
        Impedance::Capacitor(farad) => Element::Capacitor {
            name: "C5".into(),
            a: port2,
            b: 0,
            farad,
        },
    };
    n.add(load).unwrap();
    assert_eq!(placed.opamps.len(), 2);
    n
}

#[test]
fn gic_two_port_gives_z1_z3_z5_over_z2_z4() {
    // Zin = Z1 Z3 Z5 / (Z2 Z4) (Antoniou 1969, Proc. IEE 116; common
    // practice), so V(out)/V(in) = Zin / (Rsense + Zin). Arbitrary,
    // unbalanced values: the relation holds for any impedances.
    use Impedance::{Capacitor as C, Resistor as R};
    let cases: [(&str, [Impedance; 5]); 6] = [
        (
            "inductor, C in 2",
            [R(2.2e3), C(15e-9), R(4.7e3), R(10e3), R(6.8e3)],
        ),
        (
            "inductor, C in 4",
            [R(3.3e3), R(12e3), R(5.6e3), C(22e-9), R(8.2e3)],
        ),
        (
            "FDNR, C in 1 and 5",
            [C(4.7e-9), R(10e3), R(15e3), R(6.8e3), C(33e-9)],
        ),
        (
            "FDNR, C in 1 and 3",
            [C(10e-9), R(4.7e3), C(6.8e-9), R(22e3), R(3.3e3)],
        ),
        (
            "capacitor, C in 1",
            [C(2.2e-9), R(10e3), R(4.7e3), R(15e3), R(6.8e3)],
        ),
        ("resistor", [R(1e3), R(2.2e3), R(3.3e3), R(4.7e3), R(5.6e3)]),
    ];
    // Closed form against the solver: a few eps times the condition of a
    // 10-unknown system whose entries span 1e-9 to 1; measured worst
    // 3e-13, so 1e-10 leaves room while a wrong stamp shows as O(1).
    const CLOSED_FORM_REL_TOL: f64 = 1e-10;
    let r_sense = 10e3;
    let freqs = log_grid(10.0, 100e3, 41).unwrap();
    for (name, z) in cases {
        let n = gic_divider(z, r_sense);
        let expected: Vec<Complex64> = freqs
            .iter()
            .map(|&f| {
                let s = Complex64::new(0.0, std::f64::consts::TAU * f);
                let [z1, z2, z3, z4, z5] = z.map(|zk| z_of(zk, s));
                let zin = z1 * z3 * z5 / (z2 * z4);
                zin / (r_sense + zin)
            })
            .collect();
        crate::util::assert_close_rel(&expected, &transfer(&n, &freqs), CLOSED_FORM_REL_TOL, name);
        let sweep = AcSweep {
            points_per_decade: 10,
            start_hz: 10.0,
            stop_hz: 100e3,
        };
        let spice = ngspice_ac(&deck(&n, &sweep).unwrap());
        let f: Vec<f64> = spice.iter().map(|p| p.0).collect();
        let theirs: Vec<Complex64> = spice.iter().map(|p| p.1).collect();
        assert_close_response(
            &f,
            &theirs,
            &transfer(&n, &f),
            ACTIVE_TOL_DB,
            ACTIVE_TOL_DEG,
            name,
        );
    }
}

// --- the passive designs of the scipy fixture --------------------------

impl Case {
    /// Balance at the edge (lowpass, highpass) or the band's geometric
    /// centre.
    fn balance_hz(&self) -> f64 {
        self.edges_hz
            .iter()
            .product::<f64>()
            .powf(1.0 / self.edges_hz.len() as f64)
    }

    /// Where the passband deviation is reported: a decade of passband next
    /// to each edge (the whole band for bandpass).
    fn passbands(&self) -> Vec<[f64; 2]> {
        match (self.kind.as_str(), self.edges_hz.as_slice()) {
            ("lowpass", &[f]) => vec![[f / 10.0, f]],
            ("highpass", &[f]) => vec![[f, 10.0 * f]],
            ("bandpass", &[a, b]) => vec![[a, b]],
            ("bandstop", &[a, b]) => vec![[a / 10.0, a], [b, 10.0 * b]],
            other => panic!("fixture kind {other:?}"),
        }
    }

    fn options(&self, method: Method, opamp: OpAmpModel) -> Options {
        let mut opts = Options::new(self.balance_hz());
        opts.method = method;
        opts.opamp = opamp;
        opts.passband_hz = self.passbands();
        opts
    }

    /// Whether the FDNR image can serve the passive ideal: a lowpass whose
    /// capacitors are all grounded, which the minimum-capacitor form gives
    /// and the minimum-inductor form gives only without transmission
    /// zeros (its series arms are then plain inductors).
    fn fdnr_applies(&self, d: &Design) -> bool {
        self.kind == "lowpass"
            && (d.ladder.form == nocoil::synth::Form::MinCapacitor || self.family != "elliptic")
    }

    /// The methods this case is built with, each expected to succeed.
    fn methods(&self, d: &Design) -> Vec<Method> {
        let mut methods = vec![Method::Gic, Method::Auto];
        if self.fdnr_applies(d) {
            methods.push(Method::Fdnr);
        }
        methods
    }
}

/// Builds, panicking with the case and method on error.
fn build(case: &Case, d: &Design, method: Method, opamp: OpAmpModel) -> ActiveBuild {
    realize(&d.passive, &case.options(method, opamp))
        .unwrap_or_else(|e| panic!("{} {method:?}: {e}", case.name()))
}

#[test]
fn ideal_builds_equal_the_passive_ideal_and_scipy() {
    let fx = fixture();
    let mut report = Vec::new();
    for case in &fx.cases {
        let d = case.design();
        let passive = transfer(&d.passive, &case.freq_hz);
        for method in case.methods(&d) {
            let b = build(case, &d, method, OpAmpModel::Ideal);
            assert_eq!(b.netlist.count(nocoil::circuit::ElementKind::Inductor), 0);
            let active = transfer(&b.netlist, &case.freq_hz);
            let mut worst_passive: f64 = 0.0;
            for (p, a) in passive.iter().zip(&active) {
                if db(*p) > REFERENCE_FLOOR_DB {
                    worst_passive = worst_passive.max((db(*a) - db(*p)).abs());
                }
            }
            // scipy.signal reference plus the flat loss (fixture).
            let active_db: Vec<f64> = active.iter().map(|h| db(*h)).collect();
            let context = format!("{} {method:?} (scipy {})", case.name(), fx.scipy);
            let worst_scipy = case.worst_against_scipy(&active_db, ACTIVE_TOL_DB, &context);
            assert!(
                worst_passive <= ACTIVE_TOL_DB,
                "{} {method:?}: {worst_passive:.3e} dB from the passive ideal",
                case.name()
            );
            report.push(format!(
                "{:<34} {:?} -> {:?}: {:>2} op-amps, {worst_passive:.1e} dB from passive, {worst_scipy:.1e} dB from scipy",
                case.name(),
                method,
                b.method_used,
                b.opamps
            ));
        }
        if !case.fdnr_applies(&d) {
            let err = realize(&d.passive, &case.options(Method::Fdnr, OpAmpModel::Ideal));
            assert!(
                matches!(
                    err,
                    Err(ActiveError::NotApplicable {
                        method: Method::Fdnr,
                        ..
                    })
                ),
                "{}: {err:?}",
                case.name()
            );
        }
    }
    println!("ideal active builds:\n{}", report.join("\n"));
}

/// Runs the exported deck of `netlist` in ngspice over `band` and checks
/// V(out)/V(in) against this solver wherever it is above the floor;
/// returns the worst dB difference.
fn check_deck_against_ngspice(netlist: &Netlist, band: (f64, f64), context: &str) -> f64 {
    let sweep = AcSweep {
        points_per_decade: 20,
        start_hz: band.0,
        stop_hz: band.1,
    };
    let spice = ngspice_ac(&deck(netlist, &sweep).unwrap());
    let kept: Vec<(f64, Complex64)> = spice.into_iter().collect();
    let freqs: Vec<f64> = kept.iter().map(|p| p.0).collect();
    let ours = transfer(netlist, &freqs);
    let above: Vec<usize> = (0..freqs.len())
        .filter(|&k| db(ours[k]) > REFERENCE_FLOOR_DB)
        .collect();
    let pick = |v: &[Complex64]| above.iter().map(|&k| v[k]).collect::<Vec<_>>();
    let theirs: Vec<Complex64> = kept.iter().map(|p| p.1).collect();
    let f: Vec<f64> = above.iter().map(|&k| freqs[k]).collect();
    assert_close_response(
        &f,
        &pick(&theirs),
        &pick(&ours),
        ACTIVE_TOL_DB,
        ACTIVE_TOL_DEG,
        context,
    );
    above
        .iter()
        .map(|&k| (db(theirs[k]) - db(ours[k])).abs())
        .fold(0.0, f64::max)
}

#[test]
fn active_decks_match_ngspice() {
    // Every realization of every fixture design, exported with
    // export::spice::deck and run live in ngspice (Debian package
    // `ngspice`), ideal op-amps (a VCVS of gain 1e9 in the deck) and
    // single-pole ones (the deck's subcircuit of R, C and E elements).
    let fx = fixture();
    let mut report = Vec::new();
    for case in &fx.cases {
        let d = case.design();
        for method in case.methods(&d).into_iter().filter(|&m| m != Method::Auto) {
            let with_output_ohm = OpAmpModel::SinglePole {
                dc_gain: 1e5,
                gbw_hz: 10e6,
                output_ohm: 50.0,
            };
            let models = [
                ("ideal", OpAmpModel::Ideal),
                ("1 MHz", single_pole(1e6)),
                ("10 MHz", single_pole(10e6)),
                ("10 MHz 50 ohm", with_output_ohm),
            ];
            for (label, opamp) in models {
                let b = build(case, &d, method, opamp);
                let context = format!("{} {method:?} {label}", case.name());
                let worst = check_deck_against_ngspice(&b.netlist, d.view_hz(), &context);
                report.push(format!("{context:<48} worst {worst:.1e} dB"));
            }
        }
    }
    println!("active decks, ngspice vs nocoil:\n{}", report.join("\n"));
}

// --- op-amp polarities ---------------------------------------------------

/// The nodes of the GIC chain, as the module documentation names them.
const CHAIN: [&str; 6] = ["p", "a", "b", "c", "d", "0"];

/// A balanced chain (R = 10 kohm, capacitors of reactance R at 1 kHz) with
/// capacitors at `caps` (1-based positions), op-amp 1 (output `a`) and 2
/// (output `c`) with inputs (plus, minus) as given, and a resistor from
/// port 1 to ground.
fn chain_with_polarities(
    caps: &[usize],
    inputs: [(&str, &str); 2],
    models: [OpAmpModel; 2],
    termination_ohm: f64,
) -> Netlist {
    let (r, c) = (10e3, 1.0 / (std::f64::consts::TAU * 1e3 * 10e3));
    let mut n = Netlist::new("GIC polarity");
    for name in &CHAIN[..5] {
        n.node(name);
    }
    let at = |n: &Netlist, name: &str| n.node_index(name).unwrap();
    for k in 0..5 {
        let (a, b) = (at(&n, CHAIN[k]), at(&n, CHAIN[k + 1]));
        let element = match caps.contains(&(k + 1)) {
            true => Element::Capacitor {
                name: format!("C{}", k + 1),
                a,
                b,
                farad: c,
            },
            false => Element::Resistor {
                name: format!("R{}", k + 1),
                a,
                b,
                ohm: r,
            },
        };
        n.add(element).unwrap();
    }
    let p = at(&n, "p");
    n.add(Element::Resistor {
        name: "RT".into(),
        a: p,
        b: 0,
        ohm: termination_ohm,
    })
    .unwrap();
    for (k, ((plus, minus), out)) in inputs.iter().zip(["a", "c"]).enumerate() {
        let op = Element::OpAmp {
            name: format!("X{}", k + 1),
            plus: at(&n, plus),
            minus: at(&n, minus),
            out: at(&n, out),
            model: models[k],
        };
        n.add(op).unwrap();
    }
    n
}

/// The library's arrangement (gic.rs): op-amp 1 + at d, - at b; op-amp 2
/// + at p, - at b.
const LIBRARY: [(&str, &str); 2] = [("d", "b"), ("p", "b")];

#[test]
fn opamp_polarities_come_from_an_exhaustive_search() {
    // Each op-amp holds one of the equalities V(p) = V(b) = V(d) with
    // either polarity; the two must hold different ones: 24 arrangements.
    // Keep those whose every natural frequency is in the left half plane
    // for the balanced inductor (C in 2) and FDNR (C in 1 and 5) chains,
    // single-pole op-amps of 1 and 10 MHz (equal and mixed) and
    // terminations from 1 ohm to 10 Mohm.
    let pins = ["p", "b", "d"];
    let ordered: Vec<(&str, &str)> = pins
        .iter()
        .flat_map(|&x| pins.iter().filter(move |&&y| y != x).map(move |&y| (x, y)))
        .collect();
    let same_pair = |x: (&str, &str), y: (&str, &str)| x == y || (x.0, x.1) == (y.1, y.0);
    let models = [
        [single_pole(1e6); 2],
        [single_pole(10e6); 2],
        [single_pole(1e6), single_pole(10e6)],
        [single_pole(10e6), single_pole(1e6)],
    ];
    let rightmost = |caps: &[usize], inputs, m, term| {
        AcSystem::new(&chain_with_polarities(caps, inputs, m, term))
            .unwrap()
            .natural_frequencies()
            .unwrap()[0]
            .re
    };
    let mut survivors = Vec::new();
    for &x in &ordered {
        for &y in ordered.iter().filter(|&&y| !same_pair(x, y)) {
            let stable = [&[2usize][..], &[1, 5]].iter().all(|caps| {
                models.iter().all(|&m| {
                    [1.0, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7]
                        .iter()
                        .all(|&term| rightmost(caps, [x, y], m, term) < 0.0)
                })
            });
            if stable {
                survivors.push([x, y]);
            }
        }
    }
    assert_eq!(survivors, vec![LIBRARY, [("d", "b"), ("p", "d")]]);
    // The earlier arrangement for the inductor, still used by the
    // hand-built GICs of tests/circuit.rs (op-amp 1 between p and b, op-amp
    // 2 between b and d), grows with port 1 nearly open.
    let notes = [("p", "b"), ("b", "d")];
    assert!(rightmost(&[2], notes, models[0], 1e7) > 1e4);
    // And place_gic wires the library's arrangement.
    let mut n = Netlist::new("placed");
    let p = n.node("p");
    let chain = [Impedance::Resistor(1e3); 4];
    let mut placed = Placed::default();
    let d = place_gic(&mut n, "G", p, &chain, OpAmpModel::Ideal, &mut placed).unwrap();
    let b = n.node_index("G_b").unwrap();
    let pins_of = |name: &str| match n.elements[n.element_index(name).unwrap()] {
        Element::OpAmp { plus, minus, .. } => (plus, minus),
        _ => panic!("{name} is not an op-amp"),
    };
    assert_eq!([pins_of("X_G_1"), pins_of("X_G_2")], [(d, b), (p, b)]);
}

#[test]
fn the_library_arrangement_cancels_the_first_order_loss() {
    // Zin of the balanced inductor chain at 1 kHz with GBW 1 MHz
    // (GBW/f = 1000), against the ideal jwL: the library's arrangement
    // leaves a loss tangent set by A0 (1e-5 order), the other survivor
    // of the search a negative resistance of order f/GBW (measured
    // 4.4e-5 and -2.0e-3). 1e-4 separates the two with a factor 2 to 20.
    const LOSS_TANGENT_SPLIT: f64 = 1e-4;
    let zin = |inputs, model| {
        let mut n = chain_with_polarities(&[2], inputs, [model; 2], 1e12);
        let p = n.node_index("p").unwrap();
        let inp = n.node("in");
        let v1 = Element::VoltageSource {
            name: "V1".into(),
            pos: inp,
            neg: 0,
            ac_volt: 1.0,
        };
        n.add(v1).unwrap();
        let sense = Element::Resistor {
            name: "RSENSE".into(),
            a: inp,
            b: p,
            ohm: 10e3,
        };
        n.add(sense).unwrap();
        let v = AcSystem::new(&n).unwrap().node_voltages(1e3).unwrap();
        v[p] / ((v[inp] - v[p]) / 10e3)
    };
    let loss_tangent = |inputs| {
        let z = zin(inputs, single_pole(1e6)) / zin(inputs, OpAmpModel::Ideal);
        // z = 1 + dL/L - j tan(delta): Z = jwL (1 + e) = jwL + R_loss.
        -z.im
    };
    let library = loss_tangent(LIBRARY);
    let other = loss_tangent([("d", "b"), ("p", "d")]);
    assert!(library.abs() < LOSS_TANGENT_SPLIT, "library: {library:e}");
    assert!(other < -LOSS_TANGENT_SPLIT, "other: {other:e}");
}

// --- stability ---------------------------------------------------------

/// A design from a literal design file.
fn design_of(toml: &str) -> Design {
    design(&Spec::from_toml(Path::new("stability.toml"), toml).unwrap()).unwrap()
}

/// One build of each converter kind: grounded inductors (the Chebyshev
/// highpass), floating and grounded ones (the bandpass), FDNRs and the
/// buffer (the elliptic lowpass).
fn stability_cases() -> [(&'static str, Design, f64, Method); 3] {
    let highpass = "[filter]\nkind = \"highpass\"\nfamily = \"chebyshev\"\norder = 6\npassband_edge_hz = 60.0\npassband_ripple_db = 0.5\n[terminations]\nsource_ohm = 10000.0\nload_ohm = 10000.0\n";
    let bandpass = "[filter]\nkind = \"bandpass\"\nfamily = \"butterworth\"\norder = 3\npassband_edge_hz = [2000.0, 8000.0]\npassband_ripple_db = 3.0103\n[terminations]\nsource_ohm = 2200.0\nload_ohm = 2200.0\n";
    let lowpass = "[filter]\nkind = \"lowpass\"\nfamily = \"elliptic\"\norder = 7\npassband_edge_hz = 3000.0\npassband_ripple_db = 0.1\nstopband_attenuation_db = 70.0\n[terminations]\nsource_ohm = 1000.0\nload_ohm = 1000.0\n";
    [
        ("highpass", design_of(highpass), 60.0, Method::Gic),
        ("bandpass", design_of(bandpass), 4000.0, Method::Gic),
        ("lowpass", design_of(lowpass), 3000.0, Method::Fdnr),
    ]
}

/// ngspice's step response at `out`, 1 V from t = 0.
fn step(netlist: &Netlist, step_s: f64, stop_s: f64) -> Vec<(f64, f64)> {
    ngspice_tran(
        &step_deck(netlist, &StepResponse { step_s, stop_s }).unwrap(),
        "out",
    )
}

fn peak(trace: &[(f64, f64)]) -> f64 {
    trace.iter().map(|p| p.1.abs()).fold(0.0, f64::max)
}

#[test]
fn stable_builds_settle_like_the_passive_ideal_in_ngspice() {
    // Stable verdict (every natural frequency in the left half plane, with
    // A0 = 1e5 and GBW 1 and 10 MHz), checked by a live ngspice step
    // response over 40 periods of the balance frequency: bounded, and
    // ending where the passive ideal's own step response ends.
    // Bounded: the peak stays within twice the passive peak (an
    // unstable mode would grow by e^30 in the runs of the next test; the
    // active peaks measured within 0.6 % of the passive ones).
    const PEAK_FACTOR: f64 = 2.0;
    // The end values differ by the low-frequency deviation of the build
    // (below 0.12 dB, 1.4 %, at 1 MHz GBW in these passbands) times the
    // remaining signal; measured worst 0.13 % of the passive peak.
    const END_TOL: f64 = 0.01;
    for (name, d, balance_hz, method) in stability_cases() {
        let stop_s = 40.0 / balance_hz;
        let step_s = stop_s / 20_000.0;
        let passive = step(&d.passive, step_s, stop_s);
        for gbw in [1e6, 10e6] {
            let mut opts = Options::new(balance_hz);
            opts.method = method;
            opts.opamp = single_pole(gbw);
            let b = realize(&d.passive, &opts).unwrap();
            let verdict = b.stability.expect("a finite-bandwidth model has a verdict");
            let rightmost = verdict.least_damped.unwrap().root();
            assert!(
                verdict.stable && rightmost.re < 0.0,
                "{name} {gbw:e}: {verdict:?}"
            );
            let active = step(&b.netlist, step_s, stop_s);
            let (end_a, end_p) = (active.last().unwrap().1, passive.last().unwrap().1);
            assert!(
                peak(&active) <= PEAK_FACTOR * peak(&passive)
                    && (end_a - end_p).abs() <= END_TOL * peak(&passive),
                "{name} {gbw:e} Hz: active peak {} V, end {end_a} V; passive peak {} V, end {end_p} V",
                peak(&active),
                peak(&passive)
            );
        }
    }
}

/// The build with op-amp `name`'s inputs exchanged.
fn swapped(netlist: &Netlist, name: &str) -> Netlist {
    let mut n = netlist.clone();
    let index = n.element_index(name).unwrap();
    if let Element::OpAmp { plus, minus, .. } = &mut n.elements[index] {
        std::mem::swap(plus, minus);
    }
    n
}

#[test]
fn swapped_opamp_inputs_diverge_at_the_predicted_rate_in_ngspice() {
    // Exchanging the inputs of either op-amp of any converter (and of the
    // FDNR image's buffer) gives a right-half-plane natural frequency; a
    // live ngspice step response grows at its rate. Fitted over the last
    // 30 % of a run that grows by e^30, with trapezoidal steps of
    // h = 1/(250 r): the integrator changes a rate r by about
    // (r h)^2 / 12 = 1.3e-6 relative, and the other right-half-plane
    // roots of a build, whose share has shrunk by e^9 or more when the
    // window opens, add up to 8e-5 (measured); 1e-3 leaves a factor 12,
    // while a wrong verdict would be off by order one.
    const GROWTH_REL_TOL: f64 = 1e-3;
    let kinds = [
        StageKind::GroundedInductor,
        StageKind::FloatingInductor,
        StageKind::Fdnr,
        StageKind::Buffer,
    ];
    let mut checked = Vec::new();
    for (name, d, balance_hz, method) in stability_cases() {
        let mut opts = Options::new(balance_hz);
        opts.method = method;
        opts.opamp = single_pole(1e6);
        let b = realize(&d.passive, &opts).unwrap();
        for kind in kinds {
            let Some(stage) = b.stages.iter().find(|s| s.kind == kind) else {
                continue;
            };
            for op in &stage.opamps {
                let n = swapped(&b.netlist, op);
                let verdict = is_stable(&n).unwrap();
                let r = verdict.least_damped.unwrap().root();
                assert!(
                    !verdict.stable && r.re > 0.0 && r.im == 0.0,
                    "{name} {op} swapped: {verdict:?}"
                );
                let stop_s = 30.0 / r.re;
                let trace = step(&n, 1.0 / (250.0 * r.re), stop_s);
                let at = |t: f64| *trace.iter().find(|p| p.0 >= t).unwrap();
                let (p1, p2) = (at(0.7 * stop_s), *trace.last().unwrap());
                let fitted = (p2.1.abs() / p1.1.abs()).ln() / (p2.0 - p1.0);
                assert!(
                    (fitted - r.re).abs() <= GROWTH_REL_TOL * r.re,
                    "{name} {op} swapped: root {:e} 1/s, ngspice growth {fitted:e} 1/s",
                    r.re
                );
                checked.push(format!("{name} {kind:?} {op}"));
            }
        }
    }
    // Grounded inductors in the highpass and the bandpass (2 op-amps
    // each), the floating one's 4, the FDNR's 2 and the buffer.
    assert_eq!(checked.len(), 2 + 2 + 4 + 2 + 1, "{checked:?}");
}

#[test]
fn ideal_builds_carry_no_verdict_and_charge_modes_are_set_aside() {
    let fx = fixture();
    let case = fx
        .cases
        .iter()
        .find(|c| c.kind == "highpass" && c.family == "elliptic")
        .unwrap();
    let d = case.design();
    // A nullor has no dynamics of its own: no verdict.
    let ideal = build(case, &d, Method::Gic, OpAmpModel::Ideal);
    assert_eq!(ideal.stability, None);
    // Nodes touched only by capacitors keep their charge: a root at s = 0
    // each (counted here directly from the passive netlist).
    let capacitor_only = (1..d.passive.nodes.len())
        .filter(|&node| {
            d.passive.elements.iter().all(|e| {
                matches!(e, Element::Capacitor { .. }) || e.terminals().iter().all(|t| t.0 != node)
            })
        })
        .count();
    assert!(
        capacitor_only > 0,
        "this highpass has series-capacitor nodes"
    );
    let passive = is_stable(&d.passive).unwrap();
    assert_eq!(passive.charge_modes, capacitor_only);
    assert!(passive.stable, "{passive:?}");
    let real = build(case, &d, Method::Gic, single_pole(1e6));
    assert_eq!(real.stability.unwrap().charge_modes, capacitor_only);
}

// --- two-pole op-amps ----------------------------------------------------

/// A two-pole op-amp: A0 = 1e5, GBW 10 MHz, the second pole at
/// `second_pole_hz`.
fn two_pole(second_pole_hz: f64) -> OpAmpModel {
    OpAmpModel::TwoPole {
        dc_gain: 1e5,
        gbw_hz: 10e6,
        second_pole_hz,
        output_ohm: 0.0,
    }
}

/// A follower loaded by 10 kohm whose feedback passes an RC lag of
/// `tau_s` (R = 1 kohm from `out` to `f`, C from `f` to ground, the
/// inverting input at `f`); `tau_s = 0` feeds `out` straight back.
pub(crate) fn lagged_follower(model: OpAmpModel, tau_s: f64) -> Netlist {
    let mut n = Netlist::new("lagged follower");
    let (inp, out) = (n.node("in"), n.node("out"));
    let minus = if tau_s > 0.0 { n.node("f") } else { out };
    let mut elements = vec![
        Element::VoltageSource {
            name: "V1".into(),
            pos: inp,
            neg: 0,
            ac_volt: 1.0,
        },
        Element::Resistor {
            name: "RL".into(),
            a: out,
            b: 0,
            ohm: 10e3,
        },
        Element::OpAmp {
            name: "X1".into(),
            plus: inp,
            minus,
            out,
            model,
        },
    ];
    if tau_s > 0.0 {
        elements.push(Element::Resistor {
            name: "RF".into(),
            a: out,
            b: minus,
            ohm: 1e3,
        });
        elements.push(Element::Capacitor {
            name: "CF".into(),
            a: minus,
            b: 0,
            farad: tau_s / 1e3,
        });
    }
    for e in elements {
        n.add(e).unwrap();
    }
    n
}

/// Verdict root against closed form: the roots come from a shifted
/// eigenvalue problem, accurate to about 1e-10 of |s| on the circuit
/// module's checks; 1e-6 leaves room for the impedance scaling and the
/// reduced matrix of the verdict, while a wrong stamp is off by O(1).
const VERDICT_ROOT_REL_TOL: f64 = 1e-6;

#[test]
fn two_pole_verdicts_match_the_hand_analysis() {
    // A follower (common practice): with the input shorted,
    // (1 + s/w1)(1 + s/w2) + A0 = 0, that is
    // s^2 / (w1 w2) + s (1/w1 + 1/w2) + 1 + A0 = 0: a damped pair from
    // the quadratic formula, stable wherever the second pole is.
    let (a0, w1) = (1e5, std::f64::consts::TAU * 10e6 / 1e5);
    for f2 in [20e6, 5e6] {
        let w2 = std::f64::consts::TAU * f2;
        let (a, b, c) = (1.0 / (w1 * w2), 1.0 / w1 + 1.0 / w2, 1.0 + a0);
        let root = (-b + Complex64::new(b * b - 4.0 * a * c, 0.0).sqrt()) / (2.0 * a);
        let verdict = is_stable(&lagged_follower(two_pole(f2), 0.0)).unwrap();
        let got = verdict.least_damped.unwrap().root();
        let want = if got.im >= 0.0 { root } else { root.conj() };
        assert!(
            verdict.stable && (got - want).norm() <= VERDICT_ROOT_REL_TOL * want.norm(),
            "follower, f2 {f2:e} Hz: {verdict:?}, closed form {want}"
        );
    }
    // A lag in the feedback makes the loop third order:
    // P(s) = (1 + s/w1)(1 + s/w2)(1 + s tau) + A0
    //      = a3 s^3 + a2 s^2 + a1 s + a0,
    // stable exactly when a2 a1 > a3 a0 (Routh-Hurwitz, all coefficients
    // positive; common practice). For large A0 that is
    // tau (2 pi GBW - w2) < 1: a 100 ns lag is harmless with the second
    // pole at 20 MHz (above the GBW) or with a single pole, and makes the
    // loop oscillate with it at 5 MHz (critical lag about 32 ns).
    let tau = 100e-9;
    for (model, stable) in [
        (single_pole(10e6), true),
        (two_pole(20e6), true),
        (two_pole(5e6), false),
    ] {
        let inv_w2 = match model {
            OpAmpModel::TwoPole { second_pole_hz, .. } => {
                1.0 / (std::f64::consts::TAU * second_pole_hz)
            }
            _ => 0.0,
        };
        let inv_w1 = 1.0 / w1;
        let (a3, a2, a1) = (
            tau * inv_w1 * inv_w2,
            inv_w1 * inv_w2 + tau * (inv_w1 + inv_w2),
            inv_w1 + inv_w2 + tau,
        );
        let routh = a2 * a1 > a3 * (1.0 + a0);
        assert_eq!(routh, stable, "{model:?}: the hand analysis");
        let verdict = is_stable(&lagged_follower(model, tau)).unwrap();
        assert_eq!(verdict.stable, routh, "{model:?}: {verdict:?}");
        // The least-damped root is a root of P.
        let s = verdict.least_damped.unwrap().root();
        let loop_part = (1.0 + s * inv_w1) * (1.0 + s * inv_w2) * (1.0 + s * tau);
        let residual = (loop_part + a0).norm() / (loop_part.norm() + a0);
        assert!(
            residual <= VERDICT_ROOT_REL_TOL,
            "{model:?}: P({s}) is {residual:e} of its terms"
        );
    }
}

// --- the FDNR image, the method choice, the series swaps ----------------

#[test]
fn fdnr_dc_gain_is_the_ladders() {
    // The DC-path rule Rb / (Ra + Rser + Rb) = RL / (RS + RL) (at DC the
    // FDNRs and capacitors are open, leaving the divider Ra, Rser, Rb)
    // gives the ladder's DC gain, the closed form
    // RL / (RS + RL) of the terminations with the inductors shorted.
    // Rounding in the DC solve of an image whose conductances span 1e-8 S
    // (the DC-path resistors) to 1e-4 S, and in the subtraction that sets
    // Ra: measured worst 1.5e-12 relative; 1e-10 keeps a margin while a
    // wrong rule would be off by Rser / (RS + RL), order 1e-4 and up.
    const DC_REL_TOL: f64 = 1e-10;
    let fx = fixture();
    for case in fx.cases.iter().filter(|c| c.kind == "lowpass") {
        let d = case.design();
        if !case.fdnr_applies(&d) {
            continue;
        }
        for opamp in [OpAmpModel::Ideal, single_pole(1e6)] {
            let b = build(case, &d, Method::Fdnr, opamp);
            let dc = transfer(&b.netlist, &[0.0])[0];
            let want = case.load_ohm / (case.source_ohm + case.load_ohm);
            // A finite A0 leaves the follower and FDNRs a 1/A0 error.
            let tol = match opamp {
                OpAmpModel::Ideal => DC_REL_TOL,
                OpAmpModel::SinglePole { dc_gain, .. } | OpAmpModel::TwoPole { dc_gain, .. } => {
                    2.0 / dc_gain
                }
            };
            assert!(
                (dc.re - want).abs() <= tol * want && dc.im.abs() <= tol * want,
                "{}: DC gain {dc}, ladder {want}",
                case.name()
            );
            let note = b
                .notes
                .iter()
                .map(ToString::to_string)
                .find(|n| n.starts_with("DC gain"))
                .unwrap();
            assert!(note.contains("R_RS") && note.contains("R_RL"), "{note}");
            let buffer = b
                .stages
                .iter()
                .filter(|s| s.kind == StageKind::Buffer)
                .count();
            assert_eq!(buffer, 1);
        }
    }
}

#[test]
fn auto_takes_the_fewest_opamps_and_says_why() {
    let fx = fixture();
    for case in &fx.cases {
        let d = case.design();
        let auto = build(case, &d, Method::Auto, OpAmpModel::Ideal);
        let gic = build(case, &d, Method::Gic, OpAmpModel::Ideal);
        let fdnr = realize(&d.passive, &case.options(Method::Fdnr, OpAmpModel::Ideal)).ok();
        let fewest = fdnr
            .as_ref()
            .map_or(gic.opamps, |f| f.opamps.min(gic.opamps));
        assert_eq!(auto.opamps, fewest, "{}: {}", case.name(), auto.why);
        // A tie goes to simulated inductors.
        let expected = match &fdnr {
            Some(f) if f.opamps < gic.opamps => Method::Fdnr,
            _ => Method::Gic,
        };
        assert_eq!(auto.method_used, expected, "{}", case.name());
        assert!(
            auto.why
                .to_string()
                .contains(&format!("{} op-amps", auto.opamps)),
            "{}",
            auto.why
        );
        // The counts follow the stages: 2 per grounded converter, 4 per
        // floating inductor, 1 for the buffer.
        let per_stage: usize = auto.stages.iter().map(|s| s.opamps.len()).sum();
        assert_eq!(per_stage, auto.opamps);
    }
}

#[test]
fn series_lc_arms_to_ground_are_swapped_to_ground_the_converted_element() {
    // The elliptic bandstop's shunt arm is an L-C pair in series to
    // ground; simulated inductors want the inductor at ground (one GIC,
    // 2 op-amps, instead of a floating one of 4).
    let fx = fixture();
    let case = fx
        .cases
        .iter()
        .find(|c| c.kind == "bandstop" && c.family == "elliptic")
        .unwrap();
    let d = case.design();
    let b = build(case, &d, Method::Gic, OpAmpModel::Ideal);
    let swaps: Vec<String> = b
        .notes
        .iter()
        .map(ToString::to_string)
        .filter(|n| n.contains("swapped"))
        .collect();
    assert!(!swaps.is_empty(), "{:?}", b.notes);
    let grounded = b
        .stages
        .iter()
        .filter(|s| s.kind == StageKind::GroundedInductor)
        .count();
    assert_eq!(grounded, swaps.len(), "{:?}", b.stages);
    // The elliptic lowpass's arms put the capacitor at ground for the FDNR.
    let case = fx
        .cases
        .iter()
        .find(|c| c.kind == "lowpass" && c.family == "elliptic" && c.order == 7)
        .unwrap();
    let d = case.design();
    let b = build(case, &d, Method::Fdnr, OpAmpModel::Ideal);
    let fdnrs = b
        .stages
        .iter()
        .filter(|s| s.kind == StageKind::Fdnr)
        .count();
    assert_eq!(fdnrs, 3, "{:?}", b.stages);
}

// --- refinement and the report numbers ----------------------------------

#[test]
fn refinement_never_loses_to_the_balanced_values() {
    // The simplex starts at the balanced values and keeps its best point,
    // so the refined passband deviation is at most the balanced one; the
    // table is the report of op-amp counts and deviations per kind.
    let fx = fixture();
    let mut report = Vec::new();
    for case in fx.cases.iter().filter(|c| c.order <= 7) {
        let d = case.design();
        let mut row = format!("{:<28}", case.name());
        for gbw in [1e6, 10e6] {
            let balanced = build(case, &d, Method::Auto, single_pole(gbw));
            let mut opts = case.options(Method::Auto, single_pole(gbw));
            opts.optimize = Refine::Always;
            let refined = realize(&d.passive, &opts).unwrap();
            let (before, after) = (
                balanced.passband_deviation_db.unwrap(),
                refined.passband_deviation_db.unwrap(),
            );
            assert!(
                after <= before,
                "{} {gbw:e}: {after} > {before}",
                case.name()
            );
            let freqs = refine_grid(case);
            let recomputed = deviation_db(&d.passive, &refined.netlist, &freqs).unwrap();
            assert!(
                (recomputed - after).abs() <= 1e-12,
                "{recomputed} vs {after}"
            );
            row.push_str(&format!(
                " | {:?} {:>2} op-amps, GBW {:>4.0e}: {before:.2e} dB balanced, {after:.2e} dB refined",
                refined.method_used, refined.opamps, gbw
            ));
        }
        report.push(row);
    }
    println!(
        "largest passband deviation, A0 = 1e5:\n{}",
        report.join("\n")
    );
}

/// The deviation grid of `Options::passband_hz`, rebuilt from its
/// documented rule (PASSBAND_POINTS log-spaced points per band).
fn refine_grid(case: &Case) -> Vec<f64> {
    case.passbands()
        .iter()
        .flat_map(|&[lo, hi]| log_grid(lo, hi, nocoil::active::PASSBAND_POINTS).unwrap())
        .collect()
}

// --- bad input ----------------------------------------------------------

#[test]
fn bad_input_is_a_typed_error_naming_the_offender() {
    let fx = fixture();
    let highpass = fx.cases.iter().find(|c| c.kind == "highpass").unwrap();
    let d = highpass.design();
    let err = realize(
        &d.passive,
        &highpass.options(Method::Fdnr, OpAmpModel::Ideal),
    );
    match err {
        Err(ActiveError::NotApplicable {
            method: Method::Fdnr,
            needs,
            offender,
        }) => assert!(needs.contains("lowpass") && !offender.is_empty()),
        other => panic!("{other:?}"),
    }
    let with = |opamp| realize(&d.passive, &highpass.options(Method::Gic, opamp));
    for (model, quantity) in [
        (
            OpAmpModel::SinglePole {
                dc_gain: 1e5,
                gbw_hz: 0.0,
                output_ohm: 0.0,
            },
            "gbw_hz",
        ),
        (
            OpAmpModel::SinglePole {
                dc_gain: -1e5,
                gbw_hz: 1e6,
                output_ohm: 0.0,
            },
            "dc_gain",
        ),
    ] {
        match with(model) {
            Err(ActiveError::OpAmp(CircuitError::BadValue { quantity: q, .. })) => {
                assert_eq!(q, quantity)
            }
            other => panic!("{quantity}: {other:?}"),
        }
    }
    let mut opts = highpass.options(Method::Gic, OpAmpModel::Ideal);
    opts.balance_hz = -1.0;
    assert!(matches!(
        realize(&d.passive, &opts),
        Err(ActiveError::BadOption {
            option: "balance_hz",
            ..
        })
    ));
    let mut opts = highpass.options(Method::Gic, OpAmpModel::Ideal);
    opts.passband_hz.clear();
    opts.optimize = Refine::Always;
    assert_eq!(
        realize(&d.passive, &opts).unwrap_err(),
        ActiveError::NoPassband
    );
    let mut opts = highpass.options(Method::Gic, OpAmpModel::Ideal);
    opts.passband_hz = vec![[100.0, 10.0]];
    assert!(matches!(
        realize(&d.passive, &opts),
        Err(ActiveError::BadPassband { .. })
    ));
    // The contract: a node "out", a source at "in", no op-amps.
    let mut renamed = d.passive.clone();
    let out = renamed.node_index("out").unwrap();
    renamed.nodes[out] = "load".into();
    let opts = highpass.options(Method::Gic, OpAmpModel::Ideal);
    assert!(matches!(
        realize(&renamed, &opts),
        Err(ActiveError::Contract { .. })
    ));
    let active = build(highpass, &d, Method::Gic, OpAmpModel::Ideal);
    assert!(matches!(
        realize(&active.netlist, &opts),
        Err(ActiveError::Contract { .. })
    ));
}

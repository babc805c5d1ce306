//! Tests of circuit: the nodal-analysis AC solver against closed forms,
//! the fast path against the dense reference path, and the SPICE export
//! against ngspice run live.

use std::f64::consts::TAU;

use nocoil::circuit::{
    log_grid, reference_transfer, AcSystem, CircuitError, Element, ElementKind, Netlist, OpAmpKind,
    OpAmpModel, SparseAc,
};
use nocoil::export::eng;
use nocoil::export::spice::{self, AcSweep};
use num_complex::Complex64;

use crate::util::assert_close_rel;

/// Closed form versus solver, a few unknowns: rounding in the solve and in
/// the closed form is a few eps times a condition number below 1e4 here,
/// so 1e-12 keeps a wide margin while any stamping mistake shows as O(1).
const CLOSED_FORM_REL_TOL: f64 = 1e-12;

/// Fast path versus reference path: both solve the same equations in
/// doubles (differently scaled and pivoted), so they agree to a few eps
/// times the condition number; 1e-12 is the agreement this project holds
/// the fast path to against the dense reference.
const PATHS_REL_TOL: f64 = 1e-12;

/// Builds netlists by node name.
struct Build(Netlist);

impl Build {
    fn new(title: &str) -> Build {
        Build(Netlist::new(title))
    }

    fn two(
        &mut self,
        make: fn(String, usize, usize, f64) -> Element,
        name: &str,
        a: &str,
        b: &str,
        v: f64,
    ) -> &mut Build {
        let (a, b) = (self.0.node(a), self.0.node(b));
        self.0
            .add(make(name.to_string(), a, b, v))
            .expect("valid element");
        self
    }

    fn r(&mut self, name: &str, a: &str, b: &str, ohm: f64) -> &mut Build {
        self.two(
            |name, a, b, ohm| Element::Resistor { name, a, b, ohm },
            name,
            a,
            b,
            ohm,
        )
    }

    fn c(&mut self, name: &str, a: &str, b: &str, farad: f64) -> &mut Build {
        self.two(
            |name, a, b, farad| Element::Capacitor { name, a, b, farad },
            name,
            a,
            b,
            farad,
        )
    }

    fn l(&mut self, name: &str, a: &str, b: &str, henry: f64) -> &mut Build {
        self.two(
            |name, a, b, henry| Element::Inductor { name, a, b, henry },
            name,
            a,
            b,
            henry,
        )
    }

    /// The project's contract: an AC 1 source drives `in`.
    fn source(&mut self) -> &mut Build {
        self.two(
            |name, pos, neg, ac_volt| Element::VoltageSource {
                name,
                pos,
                neg,
                ac_volt,
            },
            "V1",
            "in",
            "0",
            1.0,
        )
    }

    fn opamp(
        &mut self,
        name: &str,
        plus: &str,
        minus: &str,
        out: &str,
        model: OpAmpModel,
    ) -> &mut Build {
        let (plus, minus, out) = (self.0.node(plus), self.0.node(minus), self.0.node(out));
        self.0
            .add(Element::OpAmp {
                name: name.to_string(),
                plus,
                minus,
                out,
                model,
            })
            .expect("valid op-amp");
        self
    }

    fn done(&mut self) -> Netlist {
        self.0.clone()
    }
}

/// R1 from `in` to the inverting input, R2 from there to `out`, the
/// non-inverting input grounded.
fn inverting_amplifier(r1: f64, r2: f64, model: OpAmpModel) -> Netlist {
    Build::new("inverting")
        .source()
        .r("R1", "in", "m", r1)
        .r("R2", "m", "out", r2)
        .opamp("X1", "0", "m", "out", model)
        .done()
}

/// R from `in` to `out`, C from `out` to ground.
fn rc_lowpass(r: f64, c: f64) -> Netlist {
    Build::new("rc")
        .source()
        .r("R1", "in", "out", r)
        .c("C1", "out", "0", c)
        .done()
}

/// R and L in series from `in` to `out`, C from `out` to ground.
fn series_rlc(r: f64, l: f64, c: f64) -> Netlist {
    Build::new("rlc")
        .source()
        .r("R1", "in", "a", r)
        .l("L1", "a", "out", l)
        .c("C1", "out", "0", c)
        .done()
}

fn s_of(f: f64) -> Complex64 {
    Complex64::new(0.0, TAU * f)
}

/// A single-pole op-amp model.
fn single_pole(dc_gain: f64, gbw_hz: f64, output_ohm: f64) -> OpAmpModel {
    OpAmpModel::SinglePole {
        dc_gain,
        gbw_hz,
        output_ohm,
    }
}

/// A two-pole op-amp model.
fn two_pole(dc_gain: f64, gbw_hz: f64, second_pole_hz: f64, output_ohm: f64) -> OpAmpModel {
    OpAmpModel::TwoPole {
        dc_gain,
        gbw_hz,
        second_pole_hz,
        output_ohm,
    }
}

/// Open-loop gain: A(s) = A0 / (1 + s/wp), wp = 2 pi gbw / A0, for the
/// single-pole model, and that times 1 / (1 + s/w2), w2 = 2 pi f2, for
/// the two-pole one.
fn open_loop_gain(model: OpAmpModel, s: Complex64) -> Complex64 {
    match model {
        OpAmpModel::SinglePole {
            dc_gain, gbw_hz, ..
        } => dc_gain / (1.0 + s * dc_gain / (TAU * gbw_hz)),
        OpAmpModel::TwoPole {
            dc_gain,
            gbw_hz,
            second_pole_hz,
            ..
        } => dc_gain / ((1.0 + s * dc_gain / (TAU * gbw_hz)) * (1.0 + s / (TAU * second_pole_hz))),
        OpAmpModel::Ideal => panic!("closed form needs a finite gain"),
    }
}

/// Checks the fast (dense), sparse and reference paths against a closed
/// form at each frequency.
fn check_closed_form(
    netlist: &Netlist,
    freqs: &[f64],
    closed: impl Fn(Complex64) -> Complex64,
    context: &str,
) {
    let (out, inp) = (
        netlist.node_index("out").unwrap(),
        netlist.node_index("in").unwrap(),
    );
    let mut system = AcSystem::new(netlist).expect("valid netlist");
    let expected: Vec<Complex64> = freqs.iter().map(|&f| closed(s_of(f))).collect();
    let fast: Vec<Complex64> = freqs
        .iter()
        .map(|&f| system.transfer(f, out, inp).unwrap())
        .collect();
    let slow: Vec<Complex64> = freqs
        .iter()
        .map(|&f| reference_transfer(netlist, f, out, inp).unwrap())
        .collect();
    // The sparse solver, its pivots chosen over the positive frequencies
    // (ascending); for DC alone any band will do.
    let positive: Vec<f64> = freqs.iter().copied().filter(|&f| f > 0.0).collect();
    let (from, to) = match (positive.first(), positive.last()) {
        (Some(&from), Some(&to)) => (from, to),
        _ => (1.0, 1.0),
    };
    let mut sparse = SparseAc::new(&system, from, to).expect("a band the circuit solves in");
    let sparse: Vec<Complex64> = freqs
        .iter()
        .map(|&f| sparse.transfer(f, out, inp).unwrap())
        .collect();
    assert_close_rel(
        &expected,
        &fast,
        CLOSED_FORM_REL_TOL,
        &format!("{context}: fast path"),
    );
    assert_close_rel(
        &expected,
        &sparse,
        CLOSED_FORM_REL_TOL,
        &format!("{context}: sparse path"),
    );
    assert_close_rel(
        &expected,
        &slow,
        CLOSED_FORM_REL_TOL,
        &format!("{context}: reference path"),
    );
}

const FREQS: [f64; 7] = [0.0, 1.0, 120.0, 1591.5494, 1e4, 3.3e5, 1e7];

#[test]
fn rc_lowpass_matches_its_closed_form() {
    // Voltage divider of R and 1/(sC): H = 1 / (1 + sRC).
    let (r, c) = (1.0e3, 100e-9);
    let n = rc_lowpass(r, c);
    check_closed_form(&n, &FREQS, |s| 1.0 / (1.0 + s * r * c), "RC lowpass");
}

#[test]
fn series_rlc_matches_its_closed_form() {
    // Divider of R + sL and 1/(sC): H = 1 / (1 + sRC + s^2 LC).
    let (r, l, c) = (50.0, 10e-3, 1e-6);
    let n = series_rlc(r, l, c);
    check_closed_form(
        &n,
        &FREQS,
        |s| 1.0 / (1.0 + s * r * c + s * s * l * c),
        "series RLC",
    );
}

#[test]
fn wheatstone_bridge_at_dc_matches_thevenin() {
    // Bridge R1 in-a, R2 a-0, R3 in-out, R4 out-0, galvanometer R5 a-out.
    // Thevenin across R5 (open-circuit voltages of the two dividers,
    // source resistances R1||R2 and R3||R4) gives the current through R5,
    // then V(out) = open-circuit V(out) + I5 * (R3||R4).
    let (r1, r2, r3, r4, r5) = (1.0e3, 2.2e3, 3.3e3, 4.7e3, 150.0);
    let n = Build::new("bridge")
        .source()
        .r("R1", "in", "a", r1)
        .r("R2", "a", "0", r2)
        .r("R3", "in", "out", r3)
        .r("R4", "out", "0", r4)
        .r("R5", "a", "out", r5)
        .done();
    let par = |x: f64, y: f64| x * y / (x + y);
    let (va, vb) = (r2 / (r1 + r2), r4 / (r3 + r4));
    let i5 = (va - vb) / (par(r1, r2) + par(r3, r4) + r5);
    let expected = vb + i5 * par(r3, r4);
    check_closed_form(&n, &[0.0], |_| Complex64::new(expected, 0.0), "bridge");
}

#[test]
fn inverting_amplifier_with_ideal_opamp_is_minus_r2_over_r1() {
    // Virtual ground at the inverting input: H = -R2/R1 at every frequency.
    let (r1, r2) = (1.0e3, 4.7e3);
    let n = inverting_amplifier(r1, r2, OpAmpModel::Ideal);
    check_closed_form(
        &n,
        &FREQS,
        |_| Complex64::new(-r2 / r1, 0.0),
        "inverting, ideal",
    );
}

#[test]
fn inverting_amplifier_with_single_pole_opamp_matches_closed_loop_form() {
    // v_o = -A v_-, v_- = (R2 v_in + R1 v_o) / (R1 + R2) gives
    // H = -A R2 / (R1 + R2 + A R1) with A = A0 / (1 + s/wp).
    let (r1, r2) = (1.0e3, 10.0e3);
    let model = single_pole(2.0e5, 1.0e6, 0.0);
    let n = inverting_amplifier(r1, r2, model);
    check_closed_form(
        &n,
        &FREQS,
        |s| {
            let a = open_loop_gain(model, s);
            -a * r2 / (r1 + r2 + a * r1)
        },
        "inverting, single pole",
    );
}

/// A unity-gain follower driving RL.
fn follower(model: OpAmpModel, rl: f64) -> Netlist {
    Build::new("follower")
        .source()
        .opamp("X1", "in", "out", "out", model)
        .r("RL", "out", "0", rl)
        .done()
}

#[test]
fn follower_with_output_resistance_matches_closed_loop_form() {
    // Follower sensing its loaded output: v_o = k A (v_in - v_o) with the
    // divider k = RL / (Ro + RL), so H = k A / (1 + k A).
    let (ro, rl) = (75.0, 600.0);
    for model in [
        single_pole(1.0e5, 3.0e6, ro),
        two_pole(1.0e5, 3.0e6, 6.0e6, ro),
    ] {
        let k = rl / (ro + rl);
        check_closed_form(
            &follower(model, rl),
            &FREQS,
            |s| {
                let a = open_loop_gain(model, s);
                k * a / (1.0 + k * a)
            },
            &format!("follower with output resistance, {}", model.kind()),
        );
    }
}

#[test]
fn follower_with_two_pole_opamp_is_a_over_one_plus_a() {
    // Closed form (common practice): a unity-gain follower feeds its whole
    // output back, v_o = A (v_in - v_o), so H = A / (1 + A), with
    // A(s) = A0 / ((1 + s/w1)(1 + s/w2)). Second poles at twice the GBW
    // (a flat closed loop) and at half of it (a peak near 7 MHz), over
    // 0 Hz and 1 Hz to 1 GHz, 13 points per decade.
    let mut freqs = vec![0.0];
    freqs.extend(log_grid(1.0, 1e9, 118).unwrap());
    for f2 in [20e6, 5e6] {
        let model = two_pole(1.0e5, 10e6, f2, 0.0);
        check_closed_form(
            &follower(model, 2e3),
            &freqs,
            |s| {
                let a = open_loop_gain(model, s);
                a / (1.0 + a)
            },
            &format!("two-pole follower, second pole {f2:e} Hz"),
        );
    }
}

#[test]
fn phase_margin_is_read_at_the_unity_gain_crossover() {
    // Definition (common practice): the phase margin of a follower is
    // 180 deg + arg A(j wu) where |A(j wu)| = 1; here wu is found by
    // bisection on the closed-form gain, apart from the library's
    // quadratic. The quick estimate 90 deg - atan(GBW / f2) (common
    // practice) holds once the second pole is well above the GBW, where
    // the crossover stays near the GBW: within 2.5 deg from f2 = 2 GBW up.
    const MARGIN_TOL_DEG: f64 = 1e-9;
    const ESTIMATE_TOL_DEG: f64 = 2.5;
    for (model, estimate) in [
        (two_pole(1e5, 10e6, 20e6, 0.0), true),
        (two_pole(1e5, 10e6, 100e6, 0.0), true),
        (two_pole(1e5, 10e6, 5e6, 0.0), false),
        (two_pole(3e3, 1e6, 1e6, 50.0), false),
        (single_pole(2e5, 1e6, 0.0), true),
    ] {
        let gain = |w: f64| open_loop_gain(model, Complex64::new(0.0, w));
        let (mut lo, mut hi) = (1.0_f64, 1e12_f64);
        for _ in 0..200 {
            let mid = (lo * hi).sqrt();
            if gain(mid).norm() > 1.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let want = 180.0 + gain(lo).arg().to_degrees();
        let got = model.phase_margin_deg().unwrap();
        assert!(
            (got - want).abs() <= MARGIN_TOL_DEG,
            "{model:?}: {got} deg, bisection {want} deg"
        );
        if estimate {
            let ratio = match model {
                OpAmpModel::TwoPole {
                    gbw_hz,
                    second_pole_hz,
                    ..
                } => gbw_hz / second_pole_hz,
                _ => 0.0,
            };
            let quick = 90.0 - ratio.atan().to_degrees();
            assert!(
                (got - quick).abs() <= ESTIMATE_TOL_DEG,
                "{model:?}: {got} deg, estimate {quick} deg"
            );
        }
    }
    // A GBW spread moves a second pole in proportion (OpAmpModel::with_gbw):
    // A(s) becomes A(s/k), the crossover moves by k and the phase margin
    // stays (common practice: scaling frequency leaves phases where they
    // were), to rounding.
    let base = two_pole(1e5, 10e6, 20e6, 0.0);
    let faster = base.with_gbw(13e6);
    assert_eq!(
        faster,
        two_pole(1e5, 13e6, 26e6, 0.0),
        "the second pole keeps its ratio to the GBW"
    );
    assert!((faster.phase_margin_deg().unwrap() - base.phase_margin_deg().unwrap()).abs() <= 1e-12);
    assert_eq!(OpAmpModel::Ideal.phase_margin_deg(), None);
    assert_eq!(two_pole(0.5, 1e6, 1e6, 0.0).phase_margin_deg(), None);
    assert_eq!(two_pole(1e5, 1e6, 1e6, 0.0).kind(), OpAmpKind::TwoPole);
}

/// A fixed-seed linear congruential generator (Knuth's MMIX constants):
/// reproducible "random-ish" netlists without a dependency.
struct Lcg(u64);

impl Lcg {
    fn unit(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }

    fn log_uniform(&mut self, lo: f64, hi: f64) -> f64 {
        lo * (hi / lo).powf(self.unit())
    }

    fn pick(&mut self, n: usize) -> usize {
        ((self.unit() * n as f64) as usize).min(n - 1)
    }

    fn model(&mut self) -> OpAmpModel {
        match self.pick(3) {
            0 => OpAmpModel::Ideal,
            k => OpAmpModel::SinglePole {
                dc_gain: self.log_uniform(1e4, 1e6),
                gbw_hz: self.log_uniform(1e5, 1e7),
                output_ohm: if k == 2 {
                    self.log_uniform(10.0, 200.0)
                } else {
                    0.0
                },
            },
        }
    }
}

/// A chain of random sections (RC, LC with load, series-LC trap,
/// inverting stage, follower) from `in` to `out`, about 30 nodes.
fn random_netlist(seed: u64, sections: usize) -> Netlist {
    let mut rng = Lcg(seed);
    let mut b = Build::new(&format!("random {seed}"));
    b.source();
    let mut prev = "in".to_string();
    for k in 0..sections {
        let (n, m) = (format!("n{k}"), format!("m{k}"));
        let r = |rng: &mut Lcg| rng.log_uniform(100.0, 10e3);
        let c = |rng: &mut Lcg| rng.log_uniform(1e-9, 1e-6);
        let l = |rng: &mut Lcg| rng.log_uniform(1e-4, 1e-1);
        let kind = rng.pick(5);
        match kind {
            0 => b.r(&format!("R{k}"), &prev, &n, r(&mut rng)).c(
                &format!("C{k}"),
                &n,
                "0",
                c(&mut rng),
            ),
            1 => b
                .l(&format!("L{k}"), &prev, &n, l(&mut rng))
                .c(&format!("C{k}"), &n, "0", c(&mut rng))
                .r(&format!("R{k}"), &n, "0", r(&mut rng)),
            2 => b
                .r(&format!("R{k}"), &prev, &n, r(&mut rng))
                .l(&format!("L{k}"), &n, &m, l(&mut rng))
                .c(&format!("C{k}"), &m, "0", c(&mut rng))
                .r(&format!("RL{k}"), &n, "0", r(&mut rng)),
            3 => {
                let model = rng.model();
                b.r(&format!("R{k}"), &prev, &m, r(&mut rng))
                    .r(&format!("RF{k}"), &m, &n, r(&mut rng))
                    .c(&format!("CF{k}"), &m, &n, c(&mut rng) * 1e-2)
                    .opamp(&format!("X{k}"), "0", &m, &n, model)
            }
            _ => {
                let model = rng.model();
                b.opamp(&format!("X{k}"), &prev, &n, &n, model)
                    .r(&format!("R{k}"), &n, &m, r(&mut rng))
                    .c(&format!("C{k}"), &m, "0", c(&mut rng))
                    .r(&format!("RL{k}"), &m, "0", r(&mut rng) * 10.0)
            }
        };
        // Continue from the trap's or the follower's RC node sometimes
        // (never from an inverting stage's virtual ground).
        prev = if (kind == 2 || kind == 4) && rng.pick(2) == 0 {
            m
        } else {
            n
        };
    }
    b.r("RO", &prev, "out", 1e3)
        .r("RLOAD", "out", "0", 1e3)
        .done()
}

/// Fast path versus reference at each frequency.
fn check_paths(system: &mut AcSystem, netlist: &Netlist, freqs: &[f64], context: &str) {
    let (out, inp) = (
        netlist.node_index("out").unwrap(),
        netlist.node_index("in").unwrap(),
    );
    let fast: Vec<Complex64> = freqs
        .iter()
        .map(|&f| system.transfer(f, out, inp).unwrap())
        .collect();
    let slow: Vec<Complex64> = freqs
        .iter()
        .map(|&f| reference_transfer(netlist, f, out, inp).unwrap())
        .collect();
    assert_close_rel(&slow, &fast, PATHS_REL_TOL, context);
}

#[test]
fn fast_path_matches_reference_on_random_netlists() {
    // Up to 100 kHz: beyond it the 16 cascaded lowpass-ish sections reach
    // -300 dB and more, where both paths' relative errors grow with the
    // attenuation (measured: 1.3e-12 at |H| = 3e-39, 1 MHz, seed 3). Up to
    // 100 kHz the worst measured was 1.5e-13 (seed 4, 10 Hz).
    let freqs = log_grid(10.0, 1e5, 11).unwrap();
    for seed in 1..=8 {
        let netlist = random_netlist(seed, 16);
        assert!(
            netlist.nodes.len() >= 20,
            "seed {seed}: only {} nodes",
            netlist.nodes.len()
        );
        let mut system = AcSystem::new(&netlist).unwrap();
        check_paths(&mut system, &netlist, &freqs, &format!("seed {seed}"));
    }
}

#[test]
fn refills_match_reference_and_a_fresh_build() {
    // The grid stops at 100 kHz for the reason given above.
    let freqs = log_grid(10.0, 1e5, 7).unwrap();
    let mut rng = Lcg(99);
    for seed in 11..=14 {
        let mut netlist = random_netlist(seed, 16);
        let mut system = AcSystem::new(&netlist).unwrap();
        for round in 0..5 {
            for _ in 0..4 {
                let index = rng.pick(netlist.elements.len());
                match netlist.elements[index].value() {
                    Some(v) => {
                        let new = v * rng.log_uniform(0.5, 2.0);
                        system.set_value(index, new).unwrap();
                        netlist.set_value(index, new).unwrap();
                    }
                    None => {
                        // Switch ideal and single-pole models (same pattern
                        // as long as the output resistance stays zero).
                        let Element::OpAmp { model, .. } = &mut netlist.elements[index] else {
                            unreachable!()
                        };
                        let new = match *model {
                            OpAmpModel::Ideal => single_pole(1e5, 1e6, 0.0),
                            OpAmpModel::SinglePole {
                                output_ohm: 0.0, ..
                            } => OpAmpModel::Ideal,
                            other => other.with_gbw(rng.log_uniform(1e5, 1e7)),
                        };
                        system.set_opamp_model(index, new).unwrap();
                        *model = new;
                    }
                }
            }
            let context = format!("seed {seed} round {round}");
            check_paths(&mut system, &netlist, &freqs, &context);
            // The refill invariant: bit for bit what a fresh build gives.
            let fresh = AcSystem::new(&netlist).unwrap();
            assert_eq!(system.g(), fresh.g(), "{context}: G");
            assert_eq!(system.c(), fresh.c(), "{context}: C");
            assert_eq!(system.b(), fresh.b(), "{context}: b");
            assert_eq!(system.netlist(), &netlist, "{context}: netlist copy");
        }
    }
}

#[test]
fn node_voltages_match_the_bridge_dividers() {
    // Without the galvanometer the bridge is two independent dividers.
    let n = Build::new("dividers")
        .source()
        .r("R1", "in", "a", 1.0e3)
        .r("R2", "a", "0", 3.0e3)
        .r("R3", "in", "out", 2.0e3)
        .r("R4", "out", "0", 2.0e3)
        .done();
    let v = AcSystem::new(&n).unwrap().node_voltages(0.0).unwrap();
    let expected = [0.0, 1.0, 0.75, 0.5].map(|x| Complex64::new(x, 0.0));
    let order = ["0", "in", "a", "out"].map(|name| v[n.node_index(name).unwrap()]);
    assert_close_rel(
        &expected[1..],
        &order[1..],
        CLOSED_FORM_REL_TOL,
        "divider voltages",
    );
    assert_eq!(order[0], Complex64::new(0.0, 0.0), "ground");
}

#[test]
fn group_delay_is_exact_for_rc_and_rlc() {
    // Second-order section H = 1 / (1 + a s + b s^2): phase
    // -atan(a w / (1 - b w^2)), so tau = a (1 + b w^2) / ((1 - b w^2)^2 + (a w)^2);
    // b = 0 is the RC lowpass, tau = RC / (1 + (w RC)^2).
    let tau = |a: f64, b: f64, f: f64| {
        let w = TAU * f;
        a * (1.0 + b * w * w) / ((1.0 - b * w * w).powi(2) + (a * w).powi(2))
    };
    let (r, l, c) = (50.0, 10e-3, 1e-6);
    let rc = rc_lowpass(r, c);
    let rlc = series_rlc(r, l, c);
    for (netlist, a, b) in [(rc, r * c, 0.0), (rlc, r * c, l * c)] {
        let mut system = AcSystem::new(&netlist).unwrap();
        let (out, inp) = (
            netlist.node_index("out").unwrap(),
            netlist.node_index("in").unwrap(),
        );
        for f in [1.0, 300.0, 1591.5494, 2.0e3, 5.0e4] {
            let got = system.group_delay(f, out, inp).unwrap();
            let want = tau(a, b, f);
            assert!(
                (got - want).abs() <= CLOSED_FORM_REL_TOL * want,
                "{}: {f} Hz: expected {want:e} s, got {got:e} s",
                netlist.title
            );
        }
    }
}

#[test]
fn response_group_delay_tracks_the_closed_form_within_its_truncation_error() {
    // The three-point derivative errs by about h1 h2 |phi'''| / 6 inside
    // and h1 (h1 + h2) |phi'''| / 6 at the ends. On a log grid h = w ln q
    // (q the point ratio), and for the RC lowpass w^2 |phi'''/phi'| <= 6
    // (from phi' = -RC / (1 + x^2), x = w RC), so the relative error is at
    // most (ln q)^2 inside and 2 (ln q)^2 at the ends, to leading order.
    // The next order adds a relative O(ln q): on the 1/w phase asymptote
    // the end formula errs by 2.144 (ln q)^2 at 50 points per decade
    // (computed), so each bound carries the factor (1 + 2 ln q).
    let (r, c) = (1.0e3, 159.15494e-9);
    let n = rc_lowpass(r, c);
    let per_decade = 50;
    let freqs = log_grid(1.0, 1e6, 6 * per_decade + 1).unwrap();
    let ln_q = std::f64::consts::LN_10 / per_decade as f64;
    let interior_tol = ln_q * ln_q * (1.0 + 2.0 * ln_q);
    let (out, inp) = (n.node_index("out").unwrap(), n.node_index("in").unwrap());
    let delays = AcSystem::new(&n)
        .unwrap()
        .sweep(&freqs, out, inp)
        .unwrap()
        .group_delay_s()
        .unwrap();
    let last = freqs.len() - 1;
    for (i, (f, got)) in freqs.iter().zip(&delays).enumerate() {
        let x = TAU * f * r * c;
        let want = r * c / (1.0 + x * x);
        let tol = if i == 0 || i == last {
            2.0 * interior_tol
        } else {
            interior_tol
        };
        let err = (got - want).abs() / want;
        assert!(
            err <= tol,
            "{f} Hz: relative error {err:e}, tolerance {tol:e}"
        );
    }
}

#[test]
fn response_readers_on_a_known_response() {
    // H = -j/10: -20 dB, phase -90 degrees.
    let r = nocoil::circuit::Response {
        freq_hz: vec![1.0, 2.0],
        h: vec![Complex64::new(0.0, -0.1); 2],
    };
    assert!(
        r.db().iter().all(|db| (db + 20.0).abs() < 1e-12),
        "{:?}",
        r.db()
    );
    assert!(
        r.phase_deg().iter().all(|p| (p + 90.0).abs() < 1e-12),
        "{:?}",
        r.phase_deg()
    );
    assert_eq!(r.group_delay_s().unwrap(), vec![0.0, 0.0]);
    let short = nocoil::circuit::Response {
        freq_hz: vec![1.0],
        h: vec![Complex64::new(1.0, 0.0)],
    };
    assert!(matches!(
        short.group_delay_s(),
        Err(CircuitError::BadResponseGrid { .. })
    ));
}

#[test]
fn log_grid_has_exact_ends_and_a_constant_ratio() {
    let g = log_grid(20.0, 20e3, 31).unwrap();
    assert_eq!((g.len(), g[0], g[30]), (31, 20.0, 20e3));
    let q = 10f64.powf(0.1);
    for pair in g.windows(2) {
        assert!((pair[1] / pair[0] - q).abs() < 1e-13, "{pair:?}");
    }
    for (from, to, points) in [
        (0.0, 1.0, 5),
        (10.0, 1.0, 5),
        (1.0, 10.0, 1),
        (1.0, f64::INFINITY, 5),
    ] {
        assert!(
            matches!(
                log_grid(from, to, points),
                Err(CircuitError::BadGrid { .. })
            ),
            "{from} {to} {points}"
        );
    }
}

/// Both paths must report the singularity (at `freq_hz`) as an error.
fn assert_singular(netlist: &Netlist, freq_hz: f64) {
    let (out, inp) = (
        netlist.node_index("out").unwrap(),
        netlist.node_index("in").unwrap(),
    );
    let want = Err(CircuitError::Singular { freq_hz });
    assert_eq!(
        AcSystem::new(netlist).unwrap().transfer(freq_hz, out, inp),
        want,
        "fast path"
    );
    assert_eq!(
        reference_transfer(netlist, freq_hz, out, inp),
        want,
        "reference path"
    );
}

#[test]
fn floating_island_is_singular_not_a_panic() {
    let n = Build::new("island")
        .source()
        .r("R1", "in", "out", 1e3)
        .r("R2", "out", "0", 1e3)
        .r("RA", "a", "b", 1e3)
        .c("CA", "a", "b", 1e-9)
        .done();
    assert_singular(&n, 1e3);
}

#[test]
fn capacitor_only_node_is_singular_at_dc_only() {
    // At DC the node between two capacitors floats; above DC it is the
    // capacitive divider C1 / (C1 + C2).
    let n = Build::new("caps")
        .source()
        .c("C1", "in", "out", 1e-9)
        .c("C2", "out", "0", 3e-9)
        .done();
    assert_singular(&n, 0.0);
    check_closed_form(
        &n,
        &[1.0, 1e3, 1e6],
        |_| Complex64::new(0.25, 0.0),
        "capacitive divider",
    );
}

#[test]
fn parallel_voltage_sources_are_singular() {
    let mut b = Build::new("sources");
    b.source()
        .r("R1", "in", "out", 1e3)
        .r("R2", "out", "0", 1e3);
    let (pos, neg) = (b.0.node("in"), b.0.node("0"));
    b.0.add(Element::VoltageSource {
        name: "V2".into(),
        pos,
        neg,
        ac_volt: 1.0,
    })
    .unwrap();
    assert_singular(&b.done(), 50.0);
}

#[test]
fn solver_rejects_bad_queries_with_the_offending_value() {
    let n = rc_lowpass(1e3, 1e-9);
    let mut s = AcSystem::new(&n).unwrap();
    let (out, inp) = (n.node_index("out").unwrap(), n.node_index("in").unwrap());
    assert_eq!(
        s.transfer(-1.0, out, inp),
        Err(CircuitError::BadFrequency { freq_hz: -1.0 })
    );
    assert!(matches!(
        s.transfer(f64::NAN, out, inp),
        Err(CircuitError::BadFrequency { .. })
    ));
    assert!(matches!(
        s.transfer(1.0, 9, inp),
        Err(CircuitError::NodeOutOfRange { node: 9, .. })
    ));
    assert_eq!(
        s.transfer(1.0, out, 0),
        Err(CircuitError::ZeroVoltage {
            node: 0,
            freq_hz: 1.0
        })
    );
    assert!(matches!(
        s.set_value(1, 0.0),
        Err(CircuitError::BadValue {
            quantity: "ohm",
            ..
        })
    ));
    assert!(matches!(
        s.set_value(7, 1.0),
        Err(CircuitError::ElementOutOfRange { index: 7, count: 3 })
    ));
    assert!(matches!(
        s.set_opamp_model(1, OpAmpModel::Ideal),
        Err(CircuitError::NotAnOpAmp { .. })
    ));
    // A rejected value leaves the system as it was.
    assert_eq!(s.netlist(), &n);
}

#[test]
fn opamp_model_changes_keep_or_refuse_the_pattern() {
    let model = |output_ohm| OpAmpModel::SinglePole {
        dc_gain: 1e5,
        gbw_hz: 1e6,
        output_ohm,
    };
    let n = Build::new("follower")
        .source()
        .opamp("X1", "in", "out", "out", model(50.0))
        .r("RL", "out", "0", 1e3)
        .done();
    let mut s = AcSystem::new(&n).unwrap();
    assert!(s.set_opamp_model(1, model(75.0)).is_ok());
    assert_eq!(
        s.set_opamp_model(1, OpAmpModel::Ideal),
        Err(CircuitError::OpAmpStructure {
            name: "X1".into(),
            old: OpAmpKind::SinglePole,
            old_ohm: 75.0,
            new: OpAmpKind::Ideal,
            new_ohm: 0.0
        })
    );
    assert!(matches!(
        s.set_opamp_model(1, model(-1.0)),
        Err(CircuitError::BadValue {
            quantity: "output_ohm",
            ..
        })
    ));
    assert!(matches!(
        s.set_value(1, 1.0),
        Err(CircuitError::NoScalarValue { .. })
    ));
    // A second pole is an unknown of its own: a two-pole model refills a
    // two-pole one (bit for bit what a fresh build gives), never another.
    assert_eq!(
        s.set_opamp_model(1, two_pole(1e5, 1e6, 2e6, 75.0)),
        Err(CircuitError::OpAmpStructure {
            name: "X1".into(),
            old: OpAmpKind::SinglePole,
            old_ohm: 75.0,
            new: OpAmpKind::TwoPole,
            new_ohm: 75.0
        })
    );
    let mut t = AcSystem::new(&follower(two_pole(1e5, 1e6, 2e6, 50.0), 1e3)).unwrap();
    t.set_opamp_model(1, two_pole(2e5, 3e6, 5e6, 50.0)).unwrap();
    let fresh = AcSystem::new(t.netlist()).unwrap();
    assert_eq!((t.g(), t.c()), (fresh.g(), fresh.c()));
    assert!(matches!(
        t.set_opamp_model(1, two_pole(1e5, 1e6, f64::NAN, 50.0)),
        Err(CircuitError::BadValue {
            quantity: "second_pole_hz",
            ..
        })
    ));
    assert!(matches!(
        t.set_opamp_model(1, model(50.0)),
        Err(CircuitError::OpAmpStructure { .. })
    ));
}

#[test]
fn netlist_checks_name_the_offender() {
    let mut n = Netlist::new("checks");
    let (a, b) = (n.node("a"), n.node("B"));
    assert_eq!(n.node("A"), a, "node names fold case like SPICE");
    assert_eq!(n.node("0"), 0);
    let r = |name: &str, a, b, ohm| Element::Resistor {
        name: name.into(),
        a,
        b,
        ohm,
    };
    assert!(matches!(
        n.add(r("C1", a, b, 1.0)),
        Err(CircuitError::BadPrefix { expected: 'R', .. })
    ));
    assert!(matches!(
        n.add(r("R", a, b, 1.0)),
        Err(CircuitError::BadName { .. })
    ));
    assert!(matches!(
        n.add(r("R1.x", a, b, 1.0)),
        Err(CircuitError::BadName { .. })
    ));
    assert!(matches!(
        n.add(r("R1", a, b, f64::NAN)),
        Err(CircuitError::BadValue { .. })
    ));
    assert!(matches!(
        n.add(r("R1", a, b, -5.0)),
        Err(CircuitError::BadValue { .. })
    ));
    assert!(matches!(
        n.add(r("R1", a, 5, 1.0)),
        Err(CircuitError::NodeOutOfRange { node: 5, .. })
    ));
    assert!(matches!(
        n.add(r("R1", a, a, 1.0)),
        Err(CircuitError::Shorted { .. })
    ));
    assert_eq!(n.add(r("R1", a, b, 1.0)), Ok(0));
    assert!(matches!(
        n.add(r("r1", b, 0, 1.0)),
        Err(CircuitError::DuplicateName {
            first: 0,
            second: 1,
            ..
        })
    ));
    // Node B is touched once and is no op-amp output.
    assert_eq!(
        n.validate(),
        Err(CircuitError::DanglingNode {
            node: "a".into(),
            element: "R1".into()
        })
    );
    n.add(r("R2", a, 0, 1.0)).unwrap();
    n.add(r("R3", b, 0, 1.0)).unwrap();
    assert_eq!(n.validate(), Ok(()));
    let unused = n.node("spare");
    assert_eq!(
        n.validate(),
        Err(CircuitError::UnusedNode {
            node: "spare".into()
        })
    );
    n.add(r("R4", unused, 0, 1.0)).unwrap();
    n.add(r("R5", unused, a, 1.0)).unwrap();
    for bad in ["gnd", "x y", ""] {
        let mut m = n.clone();
        m.nodes[unused] = bad.into();
        assert!(
            matches!(m.validate(), Err(CircuitError::BadNodeName { .. })),
            "{bad:?}"
        );
    }
    let mut m = n.clone();
    m.nodes[unused] = "A".into();
    assert!(matches!(
        m.validate(),
        Err(CircuitError::DuplicateNode { .. })
    ));
    assert_eq!(
        (
            n.count(ElementKind::Resistor),
            n.count(ElementKind::Capacitor),
            n.count(ElementKind::OpAmp)
        ),
        (5, 0, 0)
    );
    assert!(n.set_value(0, 0.0).is_err());
    assert_eq!(
        n.elements[0].value(),
        Some(1.0),
        "a rejected value changes nothing"
    );
}

#[test]
fn opamp_output_alone_fixes_a_node() {
    // An op-amp output is the one terminal allowed alone on a node. With a
    // finite gain it fixes the node: open loop, V(out) = A(s) V(in). A
    // nullor alone has no equation for its output (only feedback sets it),
    // so the solve reports that as singular.
    let model = single_pole(1e5, 1e6, 0.0);
    let open_loop = |model| {
        Build::new("open loop")
            .source()
            .r("R1", "in", "0", 1e3)
            .opamp("X1", "in", "0", "out", model)
            .done()
    };
    let n = open_loop(model);
    assert_eq!(n.validate(), Ok(()));
    check_closed_form(&n, &FREQS, |s| open_loop_gain(model, s), "open-loop op-amp");
    assert_singular(&open_loop(OpAmpModel::Ideal), 1e3);
}

/// ngspice versus this solver: 0.001 dB and 0.01 degree, the agreement
/// this project holds its solver to on these small networks (ten times
/// tighter than the 0.01 dB for decks of whole designs, tests/design.rs).
/// ngspice's own numerical noise is about 1e-6 relative (1e-5 dB), and the
/// deck's 10-digit values and the 1e9 VCVS standing for an ideal op-amp
/// add less than that (see `export::spice`). Measured worst: 4e-9 dB for
/// the ladder, 1.4e-10 dB for the single-pole GIC, 1.7e-6 dB and 4e-5
/// degree for the ideal GIC (the finite VCVS gain at a high noise gain).
const NGSPICE_TOL_DB: f64 = 1e-3;
/// See [`NGSPICE_TOL_DB`].
const NGSPICE_TOL_DEG: f64 = 1e-2;

/// Runs the exported deck through ngspice and compares V(out) with the
/// fast solver at ngspice's own frequencies.
fn check_against_ngspice(netlist: &Netlist, sweep: AcSweep, context: &str) {
    let deck = spice::deck(netlist, &sweep).unwrap();
    let ng = crate::util::ngspice_ac(&deck);
    let expected_points =
        sweep.points_per_decade * (sweep.stop_hz / sweep.start_hz).log10().round() as usize + 1;
    assert_eq!(
        ng.len(),
        expected_points,
        "{context}: ngspice sweep points\n{deck}"
    );
    let freqs: Vec<f64> = ng.iter().map(|p| p.0).collect();
    let spice_h: Vec<Complex64> = ng.iter().map(|p| p.1).collect();
    let (out, inp) = (
        netlist.node_index("out").unwrap(),
        netlist.node_index("in").unwrap(),
    );
    let ours = AcSystem::new(netlist)
        .unwrap()
        .sweep(&freqs, out, inp)
        .unwrap();
    crate::util::assert_close_response(
        &freqs,
        &spice_h,
        &ours.h,
        NGSPICE_TOL_DB,
        NGSPICE_TOL_DEG,
        context,
    );
}

/// Fifth-order lowpass ladder, 1 kohm terminations, corner near 1 kHz,
/// series L, shunt C (doubly terminated; values need not be a family's).
fn rlc_ladder() -> Netlist {
    Build::new("RLC ladder")
        .source()
        .r("RS", "in", "n1", 1e3)
        .c("C1", "n1", "0", 98.4e-9)
        .l("L2", "n1", "n2", 257.5e-3)
        .c("C3", "n2", "0", 318.3e-9)
        .l("L4", "n2", "n3", 257.5e-3)
        .c("C5", "n3", "out", 98.4e-9)
        .r("RX", "out", "0", 1e6)
        .r("RL", "n3", "0", 1e3)
        .done()
}

/// Highpass: series C into a grounded inductor simulated by an Antoniou
/// GIC (Z1 = R, Z2 = C, Z3 = Z4 = Z5 = R; L = C R1 R3 R5 / R4), with the
/// op-amp polarities of the stable arrangement (see
/// gic_stability_agrees_with_ngspice_step_responses), loaded by RL.
fn gic_highpass(models: [OpAmpModel; 2]) -> Netlist {
    Build::new("GIC highpass")
        .source()
        .r("RS", "in", "a", 600.0)
        .c("CS", "a", "out", 100e-9)
        .r("RL", "out", "0", 10e3)
        .r("R1", "out", "n12", 1e3)
        .c("C2", "n12", "n23", 22e-9)
        .r("R3", "n23", "n34", 1e3)
        .r("R4", "n34", "n45", 1e3)
        .r("R5", "n45", "0", 1e3)
        .opamp("XA", "out", "n23", "n12", models[0])
        .opamp("XB", "n23", "n45", "n34", models[1])
        .done()
}

const SWEEP: AcSweep = AcSweep {
    points_per_decade: 20,
    start_hz: 10.0,
    stop_hz: 1e6,
};

#[test]
fn rlc_ladder_deck_matches_ngspice() {
    check_against_ngspice(&rlc_ladder(), SWEEP, "RLC ladder");
}

#[test]
fn ideal_opamp_decks_match_ngspice() {
    let inv = Build::new("inverting")
        .source()
        .r("R1", "in", "m", 1e3)
        .r("R2", "m", "out", 22e3)
        .c("C2", "m", "out", 1e-9)
        .opamp("X1", "0", "m", "out", OpAmpModel::Ideal)
        .done();
    check_against_ngspice(&inv, SWEEP, "inverting integrator, ideal");
    check_against_ngspice(&gic_highpass([OpAmpModel::Ideal; 2]), SWEEP, "GIC, ideal");
}

#[test]
fn single_pole_opamp_decks_match_ngspice() {
    let a = single_pole(2e5, 1e6, 0.0);
    let b = single_pole(1e5, 3e6, 50.0);
    check_against_ngspice(&gic_highpass([a, b]), SWEEP, "GIC, single pole");
    let follower = Build::new("follower")
        .source()
        .opamp("X1", "in", "out", "out", b)
        .r("RL", "out", "0", 600.0)
        .done();
    check_against_ngspice(&follower, SWEEP, "loaded follower, single pole");
}

#[test]
fn two_pole_opamp_decks_match_ngspice() {
    // The deck's two-pole subcircuit (two RC lags in cascade) against the
    // solver's extra unknown: a GIC with one plain and one loaded op-amp,
    // and a peaking follower (second pole at half the GBW).
    let a = two_pole(2e5, 1e6, 2e6, 0.0);
    let b = two_pole(1e5, 3e6, 1.5e6, 50.0);
    check_against_ngspice(&gic_highpass([a, b]), SWEEP, "GIC, two poles");
    let wide = AcSweep {
        stop_hz: 1e8,
        ..SWEEP
    };
    check_against_ngspice(&follower(b, 600.0), wide, "loaded follower, two poles");
}

#[test]
fn ideal_gic_simulates_its_inductor() {
    // Zin = Z1 Z3 Z5 / (Z2 Z4) (Antoniou 1969): with ideal op-amps the GIC
    // highpass equals the same circuit with L = C2 R1 R3 R5 / R4 = 22 mH.
    let passive = Build::new("passive highpass")
        .source()
        .r("RS", "in", "a", 600.0)
        .c("CS", "a", "out", 100e-9)
        .r("RL", "out", "0", 10e3)
        .l("L1", "out", "0", 22e-9 * 1e3 * 1e3 * 1e3 / 1e3)
        .done();
    let gic = gic_highpass([OpAmpModel::Ideal; 2]);
    let freqs = log_grid(10.0, 1e6, 41).unwrap();
    let h = |n: &Netlist| {
        let (out, inp) = (n.node_index("out").unwrap(), n.node_index("in").unwrap());
        AcSystem::new(n).unwrap().sweep(&freqs, out, inp).unwrap().h
    };
    assert_close_rel(
        &h(&passive),
        &h(&gic),
        CLOSED_FORM_REL_TOL,
        "GIC versus inductor",
    );
}

#[test]
fn ngspice_transient_of_rc_step_matches_the_exponential() {
    // v(t) = 1 - exp(-t / RC) for a unit step into an RC lowpass. With the
    // step capped at 1 us and the 1 ns edge, trapezoidal integration errs
    // by about (h / RC)^2 / 12 = 8e-8 and the edge shifts time by 0.5 ns
    // (5e-7 of RC): 1e-5 volt leaves a wide margin over both (measured
    // worst 5.0e-7 V, the edge shift).
    const TRAN_TOL_V: f64 = 1e-5;
    let deck = "rc step\nV1 in 0 PULSE(0 1 0 1n 1n 1 2)\nR1 in out 1k\nC1 out 0 1u\n.tran 1u 5m 0 1u\n.end\n";
    let rc = 1e-3;
    let trace = crate::util::ngspice_tran(deck, "out");
    assert!(trace.len() > 1000, "{} points", trace.len());
    for (t, v) in trace {
        let want = if t > 0.0 { 1.0 - (-t / rc).exp() } else { 0.0 };
        assert!(
            (v - want).abs() <= TRAN_TOL_V,
            "t = {t:e}: expected {want}, got {v}"
        );
    }
}

#[test]
fn deck_refuses_bad_sweeps_and_netlists() {
    let bad = AcSweep {
        points_per_decade: 0,
        ..SWEEP
    };
    assert!(matches!(
        spice::deck(&rlc_ladder(), &bad),
        Err(spice::SpiceError::Sweep { .. })
    ));
    let mut n = rlc_ladder();
    n.nodes.push("spare".into());
    assert!(matches!(
        spice::deck(&n, &SWEEP),
        Err(spice::SpiceError::Netlist(CircuitError::UnusedNode { .. }))
    ));
}

#[test]
fn engineering_notation_for_people() {
    assert_eq!(eng::format(1.5963e-3, "H"), "1.5963 mH");
    assert_eq!(eng::format(47e-9, "F"), "47.000 nF");
    assert_eq!(eng::format(2.2e6, "ohm"), "2.2000 Mohm");
    assert_eq!(eng::format(999.996, "Hz"), "1.0000 kHz");
    assert_eq!(eng::format(0.0, "V"), "0.0000 V");
    assert_eq!(eng::format(1.5e-18, "F"), "1.5000e-18 F");
    assert_eq!(eng::format(-3.3, ""), "-3.3000");
}

/// Natural frequencies versus a closed form: the roots come from a
/// shifted eigenvalue problem, accurate to about eps times its
/// conditioning (below 1e3 here), so 1e-10 relative.
const ROOT_REL_TOL: f64 = 1e-10;

fn assert_roots(netlist: &Netlist, expected: &[Complex64], context: &str) {
    let got = AcSystem::new(netlist)
        .unwrap()
        .natural_frequencies()
        .unwrap();
    assert_eq!(
        got.len(),
        expected.len(),
        "{context}: roots {got:?}, expected {expected:?}"
    );
    assert_close_rel(expected, &got, ROOT_REL_TOL, context);
}

#[test]
fn natural_frequencies_match_closed_forms() {
    // RC with the source shorted: s = -1/RC.
    let (r, l, c) = (50.0, 10e-3, 1e-6);
    let rc = rc_lowpass(r, c);
    assert_roots(&rc, &[Complex64::new(-1.0 / (r * c), 0.0)], "RC");
    // Series RLC: roots of LC s^2 + RC s + 1, sorted by imaginary part.
    let rlc = series_rlc(r, l, c);
    let (alpha, wd) = (
        r / (2.0 * l),
        (1.0 / (l * c) - (r / (2.0 * l)).powi(2)).sqrt(),
    );
    assert_roots(
        &rlc,
        &[Complex64::new(-alpha, -wd), Complex64::new(-alpha, wd)],
        "series RLC",
    );
    // Inverting amplifier, single pole: the closed-loop denominator
    // (R1 + R2)(1 + s/wp) + A0 R1 vanishes at s = -wp (R1 + R2 + A0 R1) / (R1 + R2).
    let (r1, r2, a0, gbw) = (1.0e3, 10.0e3, 2.0e5, 1.0e6);
    let model = single_pole(a0, gbw, 0.0);
    let inv = inverting_amplifier(r1, r2, model);
    let wp = TAU * gbw / a0;
    assert_roots(
        &inv,
        &[Complex64::new(-wp * (r1 + r2 + a0 * r1) / (r1 + r2), 0.0)],
        "inverting, single pole",
    );
    // Two-pole follower: with the source shorted, v_o = -A v_o, so
    // (1 + s/w1)(1 + s/w2) + A0 = 0, that is
    // s^2 / (w1 w2) + s (1/w1 + 1/w2) + 1 + A0 = 0 (common practice),
    // roots by the quadratic formula: a flat pair (second pole at twice
    // the GBW) and a peaking one (at half of it).
    for f2 in [20e6, 5e6] {
        let (a0, gbw) = (1e5, 10e6);
        let (w1, w2) = (TAU * gbw / a0, TAU * f2);
        let (a, b, c) = (1.0 / (w1 * w2), 1.0 / w1 + 1.0 / w2, 1.0 + a0);
        let disc = Complex64::new(b * b - 4.0 * a * c, 0.0).sqrt();
        let mut expected = [(-b - disc) / (2.0 * a), (-b + disc) / (2.0 * a)];
        expected.sort_by(|x, y| y.re.total_cmp(&x.re).then(x.im.total_cmp(&y.im)));
        assert_roots(
            &follower(two_pole(a0, gbw, f2, 0.0), 2e3),
            &expected,
            &format!("two-pole follower, second pole {f2:e} Hz"),
        );
    }
    // A capacitor straight across the source (shorted with it) adds no
    // natural frequency: the highpass C1-R1 keeps its one root -1/RC.
    let across = Build::new("across")
        .source()
        .c("C0", "in", "0", 1e-6)
        .c("C1", "in", "out", c)
        .r("R1", "out", "0", r)
        .done();
    assert_roots(
        &across,
        &[Complex64::new(-1.0 / (r * c), 0.0)],
        "capacitor across the source",
    );
    // Resistors and ideal op-amps only: no dynamics at all.
    let flat = inverting_amplifier(r1, r2, OpAmpModel::Ideal);
    assert_roots(&flat, &[], "ideal inverting amplifier");
}

#[test]
fn ideal_gic_highpass_has_the_natural_frequencies_of_its_passive_model() {
    // Source shorted, loop RS + 1/(sC) + (sL || RL) = 0, times sC (sL + RL):
    // s^2 LC (RS + RL) + s (RS RL C + L) + RL = 0, with L = 22 mH (see
    // `ideal_gic_simulates_its_inductor`). The nullor rows add infinite
    // roots that must all be recognized as such.
    let (rs, cs, rl, l) = (600.0, 100e-9, 10e3, 22e-3);
    let (a, b, c) = (l * cs * (rs + rl), rs * rl * cs + l, rl);
    let disc = Complex64::new(b * b - 4.0 * a * c, 0.0).sqrt();
    let mut expected = [(-b - disc) / (2.0 * a), (-b + disc) / (2.0 * a)];
    expected.sort_by(|x, y| y.re.total_cmp(&x.re));
    assert_roots(
        &gic_highpass([OpAmpModel::Ideal; 2]),
        &expected,
        "ideal GIC highpass",
    );
}

/// The GIC highpass with op-amp `swap`'s inputs exchanged (or none).
fn gic_with_swapped_inputs(models: [OpAmpModel; 2], swap: Option<&str>) -> Netlist {
    let mut n = gic_highpass(models);
    for element in &mut n.elements {
        if let Element::OpAmp {
            name, plus, minus, ..
        } = element
        {
            if Some(name.as_str()) == swap {
                std::mem::swap(plus, minus);
            }
        }
    }
    n
}

#[test]
fn gic_stability_agrees_with_ngspice_step_responses() {
    // gic_highpass's arrangement of the GIC op-amps is stable with single-pole
    // models and swapping either op-amp's inputs makes it diverge. Check
    // the natural frequencies against live ngspice step responses: the
    // stable one decays, and the unstable one grows at exactly the rate of
    // its right-half-plane root.
    let a = single_pole(2e5, 1e6, 0.0);
    let roots = |n: &Netlist| AcSystem::new(n).unwrap().natural_frequencies().unwrap();
    let stable = gic_with_swapped_inputs([a; 2], None);
    let slowest = roots(&stable);
    assert!(
        slowest.iter().all(|s| s.re < 0.0),
        "stable arrangement: {slowest:?}"
    );
    // Its slowest mode (about -1.4e4 1/s) has decayed by e^-13 after 1 ms.
    let tran = spice::StepResponse {
        step_s: 20e-9,
        stop_s: 1e-3,
    };
    let trace = crate::util::ngspice_tran(&spice::step_deck(&stable, &tran).unwrap(), "out");
    let peak = trace.iter().map(|p| p.1.abs()).fold(0.0, f64::max);
    let last = trace.last().unwrap().1;
    assert!(
        peak < 2.0 && last.abs() < 1e-4,
        "stable GIC: peak {peak} V, final {last} V"
    );

    // Growth rate of the unstable one, fitted over the last 30 % of a run
    // that grows by e^30. Trapezoidal steps of h = 1 ns change a rate r by
    // about (r h)^2 / 12 = 1.3e-6 relative at r = 4e6 1/s (measured: 1.3e-6
    // with XA swapped, 8e-7 with XB); 1e-5 leaves an eightfold margin. The
    // window opens after a growth of e^21, when the other modes no longer
    // count (a window opening at e^12 still showed 1.3e-4 from them).
    const GROWTH_REL_TOL: f64 = 1e-5;
    for swap in ["XA", "XB"] {
        let unstable = gic_with_swapped_inputs([a; 2], Some(swap));
        let rate = roots(&unstable)[0];
        assert!(rate.re > 0.0 && rate.im == 0.0, "{swap} swapped: {rate}");
        let stop_s = 30.0 / rate.re;
        let tran = spice::StepResponse {
            step_s: 1e-9,
            stop_s,
        };
        let trace = crate::util::ngspice_tran(&spice::step_deck(&unstable, &tran).unwrap(), "out");
        let at = |t: f64| trace.iter().find(|p| p.0 >= t).unwrap();
        let (p1, p2) = (at(0.7 * stop_s), trace.last().unwrap());
        let fitted = (p2.1.abs() / p1.1.abs()).ln() / (p2.0 - p1.0);
        let err = (fitted - rate.re).abs() / rate.re;
        assert!(
            err <= GROWTH_REL_TOL,
            "{swap} swapped: root {:e} 1/s, ngspice growth {fitted:e} 1/s",
            rate.re
        );
    }
}

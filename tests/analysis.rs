//! Tests of analysis: adjoint sensitivities against central finite
//! differences, the scaling invariants and Orchard's zero-sensitivity
//! property of doubly terminated ladders; Monte Carlo reproducibility,
//! zero-width envelopes and yield against a closed-form probability;
//! op-amp signal levels against the closed-form node gains of a GIC.

use std::f64::consts::{PI, TAU};
use std::sync::atomic::{AtomicUsize, Ordering};

use nocoil::analysis::{
    monte_carlo, opamp_levels, sensitivities, summarize, AnalysisError, Limit, Mask, MonteCarlo,
    MonteCarloResult, Parameter, Scope, Sensitivity, SensitivityTable, SummaryPoints,
    ToleranceRule, BLOCK_TRIALS, MEDIAN_BINS,
};
use nocoil::circuit::{log_grid, AcSystem, Element, Netlist, OpAmpModel, Target};
use nocoil::parts::{Distribution, Tolerance};
use num_complex::Complex64;

use crate::util::assert_close_rel;

// ---------------------------------------------------------------------
// Circuits

/// A netlist from a parts list: two-terminal rows (name, a, b, value)
/// whose first letter picks R, C, L or V (an AC source), then op-amp rows
/// (name, plus, minus, out, model). Nodes are created by name; "0" is
/// ground.
fn build(
    title: &str,
    two: &[(String, String, String, f64)],
    opamps: &[(String, String, String, String, OpAmpModel)],
) -> Netlist {
    let mut n = Netlist::new(title);
    for (name, a, b, v) in two {
        let (name, a, b, v) = (name.clone(), n.node(a), n.node(b), *v);
        let element = match name.as_bytes()[0] {
            b'R' => Element::Resistor { name, a, b, ohm: v },
            b'C' => Element::Capacitor {
                name,
                a,
                b,
                farad: v,
            },
            b'L' => Element::Inductor {
                name,
                a,
                b,
                henry: v,
            },
            _ => Element::VoltageSource {
                name,
                pos: a,
                neg: b,
                ac_volt: v,
            },
        };
        n.add(element).expect("valid element");
    }
    for (name, plus, minus, out, model) in opamps {
        let (plus, minus, out) = (n.node(plus), n.node(minus), n.node(out));
        n.add(Element::OpAmp {
            name: name.clone(),
            plus,
            minus,
            out,
            model: *model,
        })
        .expect("valid op-amp");
    }
    n
}

/// A two-terminal row.
fn row(name: &str, a: &str, b: &str, v: f64) -> (String, String, String, f64) {
    (name.into(), a.into(), b.into(), v)
}

/// An op-amp row.
fn amp(
    name: &str,
    plus: &str,
    minus: &str,
    out: &str,
    model: OpAmpModel,
) -> (String, String, String, String, OpAmpModel) {
    (name.into(), plus.into(), minus.into(), out.into(), model)
}

fn single_pole(dc_gain: f64, gbw_hz: f64) -> OpAmpModel {
    OpAmpModel::SinglePole {
        dc_gain,
        gbw_hz,
        output_ohm: 0.0,
    }
}

/// Normalized Chebyshev lowpass elements g1..gn (1 ohm, 1 rad/s, equal
/// terminations for odd n) by the closed-form recursion of Matthaei,
/// Young and Jones (1964), section 4.05 (from memory): beta =
/// ln coth(Ap / 17.37), gamma = sinh(beta / 2n), a_k = sin((2k-1) pi/2n),
/// b_k = gamma^2 + sin^2(k pi / n), g1 = 2 a1 / gamma,
/// g_k = 4 a_(k-1) a_k / (b_(k-1) g_(k-1)).
fn chebyshev(ripple_db: f64, n: usize) -> Vec<f64> {
    let beta = (1.0 / (ripple_db / (40.0 / std::f64::consts::LN_10)).tanh()).ln();
    let gamma = (beta / (2.0 * n as f64)).sinh();
    let a = |k: usize| ((2 * k - 1) as f64 * PI / (2 * n) as f64).sin();
    let b = |k: usize| gamma * gamma + (k as f64 * PI / n as f64).sin().powi(2);
    let mut g = vec![2.0 * a(1) / gamma];
    for k in 2..=n {
        g.push(4.0 * a(k - 1) * a(k) / (b(k - 1) * g[k - 2]));
    }
    g
}

/// The reflection zeros of an odd-order Chebyshev lowpass, rad/s, where
/// |S21| is 1 (the zeros of T_n: cos((2k-1) pi / 2n), k = 1..(n+1)/2,
/// including 0).
fn reflection_zeros(n: usize) -> Vec<f64> {
    (1..=n.div_ceil(2))
        .map(|k| ((2 * k - 1) as f64 * PI / (2 * n) as f64).cos().max(0.0))
        .collect()
}

/// The doubly terminated lowpass ladder of prototype `g`, scaled to
/// `fp_hz` and `r0` ohm (L = g r0 / wp, C = g / (r0 wp)): shunt capacitor
/// first, or series inductor first. Source `V1` drives `in`, `RS` runs
/// into the ladder, `RL` loads node `out`.
fn ladder(g: &[f64], shunt_first: bool, fp_hz: f64, r0: f64) -> Netlist {
    let wp = TAU * fp_hz;
    let series_count = (0..g.len()).filter(|k| (k % 2 == 0) != shunt_first).count();
    let junction = |j: usize| {
        if j == series_count {
            "out".to_string()
        } else {
            format!("j{j}")
        }
    };
    let mut two = vec![row("V1", "in", "0", 1.0), row("RS", "in", &junction(0), r0)];
    let mut j = 0;
    for (k, &gk) in g.iter().enumerate() {
        let shunt = (k % 2 == 0) == shunt_first;
        if shunt {
            two.push(row(
                &format!("C{}", k + 1),
                &junction(j),
                "0",
                gk / (r0 * wp),
            ));
        } else {
            two.push(row(
                &format!("L{}", k + 1),
                &junction(j),
                &junction(j + 1),
                gk * r0 / wp,
            ));
            j += 1;
        }
    }
    two.push(row("RL", "out", "0", r0));
    build("ladder", &two, &[])
}

/// Capacitors of every FDNR's GIC, farad.
const FDNR_C: f64 = 10e-9;

/// The Bruton transform (Bruton 1969, IEEE Trans. Circuit Theory 16) of
/// the series-inductor-first ladder of `g`: every impedance divided by
/// s tau with tau = 1 / wp, so RS and RL become capacitors tau / r0,
/// each series L a resistor g r0, and each shunt C an FDNR of
/// D = g / (r0 wp^2) to ground, realized by an Antoniou GIC (Antoniou
/// 1969, Proc. IEE 116): Z1 = Z5 = FDNR_C, Z2 = Z3 = r0, Z4 = D / FDNR_C^2,
/// so Zin = Z1 Z3 Z5 / (Z2 Z4) = 1 / (s^2 D). Op-amp polarities: the one
/// driving n12 has + at the top node and - at n23, the one driving n34
/// + at n23 and - at n45 (as the GIC highpass of tests/circuit.rs).
fn fdnr_lowpass(g: &[f64], fp_hz: f64, r0: f64, model: OpAmpModel) -> Netlist {
    let wp = TAU * fp_hz;
    let tau = 1.0 / wp;
    let series_count = g.len().div_ceil(2);
    let junction = |j: usize| {
        if j == series_count {
            "out".to_string()
        } else {
            format!("j{j}")
        }
    };
    let mut two = vec![
        row("V1", "in", "0", 1.0),
        row("CS", "in", &junction(0), tau / r0),
    ];
    let mut opamps = Vec::new();
    let mut j = 0;
    for (k, &gk) in g.iter().enumerate() {
        let top = junction(j);
        if k % 2 == 0 {
            two.push(row(&format!("R{}", k + 1), &top, &junction(j + 1), gk * r0));
            j += 1;
            continue;
        }
        let d = gk / (r0 * wp * wp);
        let node = |i: usize| format!("g{}_{}", k + 1, i);
        two.extend([
            row(&format!("C{}a", k + 1), &top, &node(12), FDNR_C),
            row(&format!("R{}b", k + 1), &node(12), &node(23), r0),
            row(&format!("R{}c", k + 1), &node(23), &node(34), r0),
            row(
                &format!("R{}d", k + 1),
                &node(34),
                &node(45),
                d / (FDNR_C * FDNR_C),
            ),
            row(&format!("C{}e", k + 1), &node(45), "0", FDNR_C),
        ]);
        opamps.push(amp(
            &format!("X{}a", k + 1),
            &top,
            &node(23),
            &node(12),
            model,
        ));
        opamps.push(amp(
            &format!("X{}b", k + 1),
            &node(23),
            &node(45),
            &node(34),
            model,
        ));
    }
    two.push(row("CL", "out", "0", tau / r0));
    build("FDNR lowpass", &two, &opamps)
}

/// Highpass: series C into a grounded inductor simulated by an Antoniou
/// GIC (Z1 = R1, Z2 = C2, Z3 = R3, Z4 = R4, Z5 = R5; L = C2 R1 R3 R5 / R4
/// = 22 mH), loaded by RL; op-amp polarities as in `fdnr_lowpass`.
fn gic_highpass(model: OpAmpModel) -> Netlist {
    build(
        "GIC highpass",
        &[
            row("V1", "in", "0", 1.0),
            row("RS", "in", "a", 600.0),
            row("CS", "a", "out", 100e-9),
            row("RL", "out", "0", 10e3),
            row("R1", "out", "n12", 1e3),
            row("C2", "n12", "n23", 22e-9),
            row("R3", "n23", "n34", 1e3),
            row("R4", "n34", "n45", 1e3),
            row("R5", "n45", "0", 1e3),
        ],
        &[
            amp("XA", "out", "n23", "n12", model),
            amp("XB", "n23", "n45", "n34", model),
        ],
    )
}

/// R from `in` to `out`, C from `out` to ground.
fn rc_lowpass(r: f64, c: f64) -> Netlist {
    build(
        "rc",
        &[
            row("V1", "in", "0", 1.0),
            row("R1", "in", "out", r),
            row("C1", "out", "0", c),
        ],
        &[],
    )
}

/// (out, in) node indices by the project's naming contract.
fn ports(n: &Netlist) -> (usize, usize) {
    (n.node_index("out").unwrap(), n.node_index("in").unwrap())
}

fn system(n: &Netlist) -> AcSystem {
    AcSystem::new(n).expect("valid netlist")
}

// ---------------------------------------------------------------------
// The test circuits themselves

/// Ladder and FDNR identities hold to rounding: the solver agrees with
/// closed forms to 1e-12 (tests/circuit.rs), and the element values here
/// are within a few eps of their formulas.
const IDENTITY_REL_TOL: f64 = 1e-10;

#[test]
fn chebyshev_recursion_reproduces_the_published_tables() {
    // Matthaei, Young and Jones (1964), table 4.05-2 (from memory), and
    // values recomputed with the closed-form element formula, printed to 4
    // decimals.
    const PRINTED: f64 = 5e-5;
    let tables: [(f64, &[f64]); 3] = [
        (0.5, &[1.5963, 1.0967, 1.5963]),
        (0.1, &[1.1468, 1.3712, 1.9750, 1.3712, 1.1468]),
        (1.0, &[2.0236, 0.9941, 2.0236]),
    ];
    for (ripple, expected) in tables {
        let got = chebyshev(ripple, expected.len());
        for (g, e) in got.iter().zip(expected) {
            assert!(
                (g - e).abs() <= PRINTED,
                "{ripple} dB: {got:?} vs {expected:?}"
            );
        }
    }
}

#[test]
fn fdnr_lowpass_equals_its_passive_ladder_with_ideal_opamps() {
    // The Bruton transform divides every impedance by the same s tau, so
    // the voltage ratio is unchanged (Bruton 1969).
    let g = chebyshev(0.1, 7);
    let passive = ladder(&g, false, 1e3, 10e3);
    let active = fdnr_lowpass(&g, 1e3, 10e3, OpAmpModel::Ideal);
    let freqs = log_grid(10.0, 1e5, 61).unwrap();
    let h = |n: &Netlist| {
        let (out, inp) = ports(n);
        system(n).sweep(&freqs, out, inp).unwrap().h
    };
    assert_close_rel(
        &h(&passive),
        &h(&active),
        IDENTITY_REL_TOL,
        "FDNR vs ladder",
    );
}

// ---------------------------------------------------------------------
// Sensitivity

/// `system` with the parameter of `row` multiplied by `factor`.
fn perturbed(system: &AcSystem, row: &Sensitivity, factor: f64) -> AcSystem {
    let mut s = system.clone();
    match (row.parameter, &s.netlist().elements[row.element]) {
        (Parameter::Value, e) => {
            let v = e.value().unwrap();
            s.set_value(row.element, v * factor).unwrap();
        }
        (Parameter::GainBandwidth, Element::OpAmp { model, .. }) => {
            let gbw_hz = model
                .gbw_hz()
                .unwrap_or_else(|| panic!("{}: an ideal op-amp has no GBW", row.name));
            // A second pole moves with the GBW (OpAmpModel::with_gbw).
            let model = model.with_gbw(gbw_hz * factor);
            s.set_opamp_model(row.element, model).unwrap();
        }
        (_, other) => panic!("no gain-bandwidth in {other:?}"),
    }
    s
}

/// Step in ln p of the central differences. Their truncation error,
/// (h^2 / 6) d^3 ln H / d ln p^3, measured at most 1.2e-8 on the circuits
/// below at h = 1e-4 (1.2e-6 at h = 1e-3: it scales as h^2), and their
/// rounding error about 5e-10 (the floor reached at h = 1e-5 on the GIC).
const FD_STEP: f64 = 1e-4;

/// |adjoint - finite difference| / (1 + |S|): four times the truncation
/// error measured at [`FD_STEP`]; a wrong stamp or sign shows as O(1).
const FD_TOL: f64 = 5e-8;

/// d ln H / d ln p by central differences: ln(H(p e^h) / H(p e^-h)) / 2h.
fn central_difference(system: &AcSystem, row: &Sensitivity, f: f64) -> Complex64 {
    let (out, inp) = ports(system.netlist());
    let h = |factor: f64| {
        perturbed(system, row, factor)
            .transfer(f, out, inp)
            .unwrap()
    };
    (h(FD_STEP.exp()) / h((-FD_STEP).exp())).ln() / (2.0 * FD_STEP)
}

/// Circuits with every kind of parameter: L and C (ladder), R, C and
/// op-amp gain-bandwidth (GIC highpass with single-pole and with two-pole
/// op-amps, FDNR lowpass).
fn sensitivity_circuits() -> Vec<Netlist> {
    let mut two_pole_gic = gic_highpass(OpAmpModel::TwoPole {
        dc_gain: 2e5,
        gbw_hz: 1e6,
        second_pole_hz: 2e6,
        output_ohm: 0.0,
    });
    two_pole_gic.title += ", two-pole op-amps";
    vec![
        ladder(&chebyshev(0.1, 5), true, 1e3, 1e3),
        gic_highpass(single_pole(2e5, 1e6)),
        two_pole_gic,
        fdnr_lowpass(&chebyshev(0.1, 7), 1e3, 10e3, single_pole(1e5, 3e6)),
    ]
}

/// Each of [`sensitivity_circuits`] with its sensitivity table over three
/// decades around its 1 kHz-ish edges.
fn sensitivity_runs() -> Vec<(Netlist, AcSystem, SensitivityTable)> {
    let freqs = log_grid(30.0, 3e4, 13).unwrap();
    sensitivity_circuits()
        .into_iter()
        .map(|n| {
            let mut sys = system(&n);
            let (out, inp) = ports(&n);
            let table = sensitivities(&mut sys, out, inp, &freqs).unwrap();
            (n, sys, table)
        })
        .collect()
}

#[test]
fn adjoint_sensitivities_match_central_differences() {
    for (n, sys, table) in &sensitivity_runs() {
        let freqs = &table.freq_hz;
        // Every R, C, L and finite-bandwidth op-amp has its row, in order.
        let expected: Vec<usize> = n
            .elements
            .iter()
            .enumerate()
            .filter(|(_, e)| !e.name().starts_with('V'))
            .map(|(i, _)| i)
            .collect();
        let got: Vec<usize> = table.rows.iter().map(|r| r.element).collect();
        assert_eq!(got, expected, "{}", n.title);
        for r in &table.rows {
            let db = r.db_per_percent();
            for (i, &f) in freqs.iter().enumerate() {
                let fd = central_difference(sys, r, f);
                let err = (fd - r.relative[i]).norm() / (1.0 + fd.norm());
                assert!(
                    err <= FD_TOL,
                    "{} {} at {f} Hz: adjoint {}, differences {fd} (error {err:e})",
                    n.title,
                    r.name,
                    r.relative[i]
                );
                // dB per %: 20 / ln 10 dB per neper, 1 % = 0.01 in ln p.
                let fd_db = fd.re * 20.0 / std::f64::consts::LN_10 * 0.01;
                assert!((db[i] - fd_db).abs() <= FD_TOL * (1.0 + fd_db.abs()));
            }
        }
    }
}

/// Sum of the relative sensitivities of the rows matching `pick`, each
/// times its weight.
fn weighted_sum(rows: &[Sensitivity], i: usize, weight: impl Fn(&Sensitivity) -> f64) -> Complex64 {
    rows.iter().map(|r| r.relative[i] * weight(r)).sum()
}

/// The scaling sums hold to rounding: each term is accurate to a few
/// eps times the condition number, and a sum of up to 30 terms of size up
/// to 3 adds their errors (measured: at most 8.5e-14, on the FDNR
/// lowpass); 1e-12 leaves a factor of 10, while a wrong stamp or sign
/// shows as O(1).
const SUM_RULE_TOL: f64 = 1e-12;

#[test]
fn sensitivities_obey_the_impedance_and_frequency_scaling_sums() {
    // Homogeneity (common practice): H is unchanged when every R and L is
    // multiplied by k and every C divided by k, so
    // sum S_R + sum S_L - sum S_C = 0; and multiplying every L and C by k
    // (and dividing every gain-bandwidth by k) is H at k w, so
    // sum S_L + sum S_C - sum S_gbw = d ln H / d ln w, whose imaginary part
    // is -w tau (group delay tau, computed by AcSystem::group_delay).
    for (n, sys, table) in &mut sensitivity_runs() {
        let (out, inp) = ports(n);
        let freqs = table.freq_hz.clone();
        let letter = |r: &Sensitivity| r.name.as_bytes()[0];
        for (i, &f) in freqs.iter().enumerate() {
            let impedance = weighted_sum(&table.rows, i, |r| match letter(r) {
                b'R' | b'L' => 1.0,
                b'C' => -1.0,
                _ => 0.0,
            });
            let frequency = weighted_sum(&table.rows, i, |r| match r.parameter {
                Parameter::GainBandwidth => -1.0,
                Parameter::Value if letter(r) == b'R' => 0.0,
                Parameter::Value => 1.0,
            });
            let tau = sys.group_delay(f, out, inp).unwrap();
            assert!(
                impedance.norm() <= SUM_RULE_TOL,
                "{} at {f} Hz: impedance sum {impedance}",
                n.title
            );
            let w = TAU * f;
            assert!(
                (frequency.im + w * tau).abs() <= SUM_RULE_TOL * (1.0 + w * tau.abs()),
                "{} at {f} Hz: frequency sum {frequency}, -w tau = {}",
                n.title,
                -w * tau
            );
        }
    }
}

/// First-order sensitivity of |H| at a reflection zero: zero up to the
/// rounding of the solve and of the frequency cos((2k-1) pi / 2n) (both
/// a few eps, and the slope of |H| is itself zero there, so an error in
/// the frequency enters at second order). Measured: at most 4.7e-15.
const ORCHARD_TOL: f64 = 1e-12;

/// A sensitivity that is "not zero": 1e9 times [`ORCHARD_TOL`], and 30
/// times below the largest L or C sensitivity of these ladders at the
/// weakest of the other frequencies tested (measured: 3.1e-2).
const NONZERO: f64 = 1e-3;

/// At each reflection zero of a doubly terminated lossless ladder: zero
/// sensitivity of |H| to every L and C, +1/2 to RL and -1/2 to RS (see
/// the test below for why).
fn assert_orchard(sys: &mut AcSystem, zeros_hz: &[f64], context: &str) {
    let (out, inp) = ports(sys.netlist());
    let table = sensitivities(sys, out, inp, zeros_hz).unwrap();
    for r in &table.rows {
        let expected = match r.name.as_str() {
            "RL" => 0.5,
            "RS" => -0.5,
            _ => 0.0,
        };
        for (s, f) in r.relative.iter().zip(zeros_hz) {
            assert!(
                (s.re - expected).abs() <= ORCHARD_TOL,
                "{context} {}: S = {s} at {f} Hz",
                r.name
            );
        }
    }
}

#[test]
fn doubly_terminated_ladders_have_zero_sensitivity_at_reflection_zeros() {
    // Orchard (1966), "Inductorless filters", Electronics Letters 2: a
    // lossless ladder between resistive terminations passes the maximum
    // available power at each reflection zero, so no L or C can raise |H|
    // there and every d|H|/dL, d|H|/dC vanishes. There
    // |H|^2 = RL / (4 RS) (1 - |rho|^2) with rho = 0, so
    // S_RL = +1/2 and S_RS = -1/2 exactly (common practice).
    for (ripple, order) in [(0.5, 3), (0.1, 5), (0.1, 7)] {
        let g = chebyshev(ripple, order);
        for shunt_first in [true, false] {
            let n = ladder(&g, shunt_first, 1.0 / TAU, 1.0);
            let (out, inp) = ports(&n);
            let mut sys = system(&n);
            let zeros: Vec<f64> = reflection_zeros(order).iter().map(|w| w / TAU).collect();
            assert_orchard(&mut sys, &zeros, &format!("{ripple} dB n={order}"));
            // Between and beyond the reflection zeros the L and C do
            // matter: at the ripple valleys, the edge and in the stopband.
            let elsewhere: Vec<f64> = [0.25, 0.5, 0.75, 1.0, 1.5]
                .iter()
                .map(|w| w / TAU)
                .collect();
            let table = sensitivities(&mut sys, out, inp, &elsewhere).unwrap();
            for (i, f) in elsewhere.iter().enumerate() {
                let largest = table
                    .rows
                    .iter()
                    .filter(|r| !r.name.starts_with('R'))
                    .map(|r| r.relative[i].re.abs())
                    .fold(0.0, f64::max);
                assert!(
                    largest >= NONZERO,
                    "{ripple} dB n={order}: largest L/C sensitivity {largest} at w = {}",
                    f * TAU
                );
            }
        }
    }
}

// ---------------------------------------------------------------------
// What this stage added to circuit: element stamps and the adjoint solve

/// Sums of stamps and transposed solves are exact up to a few eps times
/// the size of the entries and the condition number (below 1e4 here).
const STAMP_REL_TOL: f64 = 1e-12;

#[test]
fn element_stamps_add_up_to_the_system_matrices() {
    for n in &sensitivity_circuits() {
        let sys = system(n);
        let (g, c, b) = (sys.g().clone(), sys.c().clone(), sys.b().clone());
        let (mut g2, mut c2, mut b2) = (g.clone() * 0.0, c.clone() * 0.0, b.clone() * 0.0);
        for index in 0..n.elements.len() {
            for (target, v) in sys.element_stamps(index).unwrap() {
                match target {
                    Target::G(r, col) => g2[(r, col)] += v,
                    Target::C(r, col) => c2[(r, col)] += v,
                    Target::B(r) => b2[r] += v,
                }
            }
        }
        let scale = g.amax().max(c.amax()).max(b.amax());
        let worst = (g - g2).amax().max((c - c2).amax()).max((b - b2).amax());
        assert!(worst <= STAMP_REL_TOL * scale, "{}: {worst:e}", n.title);
    }
    let err = system(&gic_highpass(OpAmpModel::Ideal))
        .element_stamps(99)
        .unwrap_err();
    assert!(err.to_string().contains("element index 99"), "{err}");
}

#[test]
fn adjoint_solves_the_transposed_system() {
    for n in &sensitivity_circuits() {
        let mut sys = system(n);
        let (out, inp) = ports(n);
        let (g, c) = (sys.g().clone(), sys.c().clone());
        let f = 1234.5;
        let a = g.map(|v| Complex64::new(v, 0.0)) + c.map(|v| Complex64::new(0.0, TAU * f * v));
        let h = sys.clone().transfer(f, out, inp).unwrap();
        let adjoint = sys.transfer_adjoint(f, out, inp).unwrap();
        assert_close_rel(&[h], &[adjoint.h], STAMP_REL_TOL, "H of the adjoint solve");
        let x = nalgebra::DVector::from_column_slice(adjoint.x);
        let y = nalgebra::DVector::from_column_slice(adjoint.y);
        // A^T y = e_out / V(out) - e_in / V(in).
        let mut rhs = nalgebra::DVector::zeros(x.len());
        let (uo, ui) = (
            sys.unknown_of_node(out).unwrap(),
            sys.unknown_of_node(inp).unwrap(),
        );
        rhs[uo] += 1.0 / x[uo];
        rhs[ui] -= 1.0 / x[ui];
        let residual = (a.transpose() * &y - &rhs).camax();
        let scale = a.camax() * y.camax() + rhs.camax();
        assert!(
            residual <= STAMP_REL_TOL * scale,
            "{}: {residual:e}",
            n.title
        );
    }
}

#[test]
fn adjoint_gives_the_closed_form_group_delay_of_an_rc_lowpass() {
    // d ln H / ds = -y^T C x, and tau = -Re(d ln H / ds) (the derivative
    // of the phase along jw); for H = 1 / (1 + s RC) the closed form is
    // tau = RC / (1 + (w RC)^2).
    let (r, c) = (1e3, 100e-9);
    let n = rc_lowpass(r, c);
    let (out, inp) = ports(&n);
    let mut sys = system(&n);
    let cm = sys.c().map(|v| Complex64::new(v, 0.0));
    for f in [0.0, 10.0, 1591.5494, 1e5] {
        let adjoint = sys.transfer_adjoint(f, out, inp).unwrap();
        let cx = &cm * nalgebra::DVector::from_column_slice(adjoint.x);
        let d_ln_h: Complex64 = -adjoint
            .y
            .iter()
            .zip(cx.iter())
            .map(|(y, v)| y * v)
            .sum::<Complex64>();
        let w = TAU * f;
        let exact = r * c / (1.0 + (w * r * c).powi(2));
        assert!(
            (-d_ln_h.re - exact).abs() <= STAMP_REL_TOL * exact,
            "{f} Hz: {} vs {exact}",
            -d_ln_h.re
        );
    }
}

#[test]
fn summaries_pick_the_edges_and_the_passband_worst() {
    let n = fdnr_lowpass(&chebyshev(0.1, 7), 1e3, 10e3, single_pole(1e5, 3e6));
    let (out, inp) = ports(&n);
    let mut sys = system(&n);
    let points = SummaryPoints {
        passband_edges_hz: vec![1e3],
        passband_hz: log_grid(10.0, 1e3, 41).unwrap(),
        stopband_edges_hz: vec![1.5e3],
    };
    let summary = summarize(&mut sys, out, inp, &points).unwrap();
    let at = |freqs: &[f64]| sensitivities(&mut sys.clone(), out, inp, freqs).unwrap();
    let (edge, pass, stop) = (
        at(&points.passband_edges_hz),
        at(&points.passband_hz),
        at(&points.stopband_edges_hz),
    );
    assert_eq!(summary.len(), edge.rows.len());
    for (i, s) in summary.iter().enumerate() {
        assert_eq!(s.name, edge.rows[i].name);
        assert_eq!(
            s.passband_edge.db_per_percent,
            edge.rows[i].db_per_percent()[0]
        );
        assert_eq!(s.passband_edge.freq_hz, 1e3);
        assert_eq!(
            s.stopband_edge.db_per_percent,
            stop.rows[i].db_per_percent()[0]
        );
        let db = pass.rows[i].db_per_percent();
        let k = (0..db.len())
            .max_by(|&a, &b| db[a].abs().total_cmp(&db[b].abs()))
            .unwrap();
        assert_eq!(
            s.passband_worst.db_per_percent.abs(),
            db[k].abs(),
            "{}",
            s.name
        );
        assert_eq!(s.passband_worst.db_per_percent, db[k]);
    }
    // The op-amps matter: a GBW of 3 MHz against a 1 kHz edge still moves
    // the edge response measurably.
    assert!(summary
        .iter()
        .any(|s| s.parameter == Parameter::GainBandwidth && s.passband_edge.db_per_percent != 0.0));
    let empty = SummaryPoints {
        passband_edges_hz: vec![],
        ..points
    };
    assert_eq!(
        summarize(&mut sys, out, inp, &empty),
        Err(AnalysisError::EmptyGrid {
            what: "passband edge"
        })
    );
}

#[test]
fn sensitivity_queries_the_solver_refuses_are_errors() {
    let n = gic_highpass(single_pole(2e5, 1e6));
    let (out, inp) = ports(&n);
    let mut sys = system(&n);
    for (freqs, node) in [(vec![-1.0], out), (vec![1e3], 99), (vec![1e3], 0)] {
        let err = sensitivities(&mut sys, node, inp, &freqs).unwrap_err();
        assert!(matches!(err, AnalysisError::Circuit(_)), "{err:?}");
    }
}

// ---------------------------------------------------------------------
// Monte Carlo

fn uniform(relative: f64) -> Tolerance {
    Tolerance::new(relative, Distribution::Uniform).unwrap()
}

fn gaussian(relative: f64) -> Tolerance {
    Tolerance::new(relative, Distribution::Gaussian).unwrap()
}

fn rule(scope: Scope, tolerance: Tolerance) -> ToleranceRule {
    ToleranceRule { scope, tolerance }
}

/// Flat loss of an equally terminated ladder, dB: |H| = 1/2.
const FLAT_DB: f64 = -6.020599913279624;

/// The mask of the 7th-order 0.1 dB FDNR lowpass at 1 kHz, a little
/// tighter than its own ripple so that part spreads cost yield: passband
/// within 0.1 dB ripple plus `slack_db`, 36.2 dB nominal attenuation at
/// 1.5 kHz held to 35 dB.
fn fdnr_mask(slack_db: f64) -> Mask {
    Mask::new(vec![
        Limit {
            from_hz: 0.0,
            to_hz: 1e3,
            min_db: FLAT_DB - 0.1 - slack_db,
            max_db: FLAT_DB + slack_db,
        },
        Limit {
            from_hz: 1.5e3,
            to_hz: 1e9,
            min_db: f64::NEG_INFINITY,
            max_db: FLAT_DB - 35.0,
        },
    ])
    .unwrap()
}

fn fdnr() -> Netlist {
    fdnr_lowpass(&chebyshev(0.1, 7), 1e3, 10e3, single_pole(1e5, 3e6))
}

/// A Monte Carlo run of [`fdnr`] on `points` frequencies from 100 Hz to
/// 3 kHz against `fdnr_mask(0.05)`, reporting the `worst` worst trials
/// (every trial's summary when `worst` is the trial count), on the
/// current rayon pool.
fn fdnr_run(
    rules: &[ToleranceRule],
    trials: usize,
    worst: usize,
    seed: u64,
    points: usize,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> MonteCarloResult {
    let n = fdnr();
    let (out, inp) = ports(&n);
    let freqs = log_grid(100.0, 3e3, points).unwrap();
    let mask = fdnr_mask(0.05);
    let setup = MonteCarlo {
        out,
        inp,
        freqs_hz: &freqs,
        rules,
        mask: &mask,
        trials,
        seed,
        worst,
        roots: None,
        delay: None,
        tuning: None,
    };
    monte_carlo(&system(&n), &setup, progress).unwrap()
}

/// Every float of a result as bits, so equality is bit for bit (every
/// trial's summary when the run kept them all as its worst).
fn bits(r: &MonteCarloResult) -> Vec<u64> {
    let e = &r.envelope;
    let trials = r
        .worst
        .iter()
        .flat_map(|t| [t.margin_db, t.max_deviation_db, t.trial as f64]);
    [&e.min_db, &e.median_db, &e.max_db, &r.nominal_db]
        .into_iter()
        .flatten()
        .copied()
        .chain(trials)
        .chain([r.yield_fraction])
        .map(f64::to_bits)
        .collect()
}

#[test]
fn monte_carlo_is_bit_for_bit_the_same_on_1_and_2_threads() {
    let rules = [
        rule(Scope::Resistors, gaussian(0.01)),
        rule(Scope::Capacitors, uniform(0.02)),
        rule(Scope::OpAmpGbw, uniform(0.3)),
        rule(Scope::Element("cs".into()), uniform(0.05)),
    ];
    // Every trial kept as a worst one, so every trial's summary is
    // compared.
    let on = |threads: usize, worst: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| fdnr_run(&rules, 200, worst, 42, 40, None))
    };
    let (one, two) = (on(1, 200), on(2, 200));
    assert_eq!(bits(&one), bits(&two));
    assert_eq!(one, two);
    assert_eq!(one.trials, 200);
    // A test of partial yield: some trials pass and some fail.
    assert!(
        one.passed > 0 && one.passed < 200,
        "yield {}",
        one.yield_fraction
    );
    // Every R, C and op-amp is varied; the override gave CS its own.
    let cs = one.varied.iter().find(|v| v.name == "CS").unwrap();
    assert_eq!(cs.tolerance, uniform(0.05));
    let varied = fdnr()
        .elements
        .iter()
        .filter(|e| !e.name().starts_with('V'))
        .count();
    assert_eq!(one.varied.len(), varied);
    // Kept all, the worst trials are every trial once, smallest margin
    // first, ties by index; the 5 worst of the same run are their first
    // five. A trial passes exactly when its margin is not negative, and
    // the count of passing trials is `passed`.
    let mut indices: Vec<usize> = one.worst.iter().map(|t| t.trial).collect();
    indices.sort_unstable();
    assert_eq!(indices, (0..200).collect::<Vec<_>>());
    assert!(one.worst.windows(2).all(|w| w[0]
        .margin_db
        .total_cmp(&w[1].margin_db)
        .then(w[0].trial.cmp(&w[1].trial))
        .is_lt()));
    let five = on(2, 5);
    assert_eq!(five.worst, one.worst[..5]);
    assert!(one.worst.iter().all(|t| t.passed == (t.margin_db >= 0.0)));
    assert_eq!(one.passed, one.worst.iter().filter(|t| t.passed).count());
}

#[test]
fn zero_tolerances_give_full_yield_and_a_zero_width_envelope() {
    let rules = [
        rule(Scope::Resistors, uniform(0.0)),
        rule(Scope::Capacitors, gaussian(0.0)),
        rule(Scope::OpAmpGbw, uniform(0.0)),
    ];
    let r = fdnr_run(&rules, 50, 50, 1, 40, None);
    assert_eq!(r.yield_fraction, 1.0);
    assert_eq!(r.passed, 50);
    let e = &r.envelope;
    for field in [&e.min_db, &e.median_db, &e.max_db] {
        let same = field
            .iter()
            .zip(&r.nominal_db)
            .all(|(a, b)| a.to_bits() == b.to_bits());
        assert!(same, "envelope {field:?} vs nominal {:?}", r.nominal_db);
    }
    assert_eq!(r.worst.len(), 50, "every trial kept as a worst one");
    assert!(r.worst.iter().all(|t| t.max_deviation_db == 0.0));
}

/// P(a b <= q) for a, b independent and uniform on [1 - t, 1 + t]: the
/// integral over a of P(b <= q / a), in closed form. With lo = 1 - t,
/// hi = 1 + t, a1 = clamp(q / hi), a2 = clamp(q / lo) (clamped to
/// [lo, hi]): P = [(a1 - lo) + (q ln(a2 / a1) - lo (a2 - a1)) / 2t] / 2t.
fn product_cdf(q: f64, t: f64) -> f64 {
    let (lo, hi) = (1.0 - t, 1.0 + t);
    let a1 = (q / hi).clamp(lo, hi);
    let a2 = (q / lo).clamp(lo, hi);
    ((a1 - lo) + (q * (a2 / a1).ln() - lo * (a2 - a1)) / (2.0 * t)) / (2.0 * t)
}

/// Distance of a Monte Carlo yield from the exact one, in binomial
/// standard errors sqrt(p (1 - p) / N): a correct sampler exceeds 4 with
/// probability 6e-5.
const YIELD_STANDARD_ERRORS: f64 = 4.0;

#[test]
fn rc_yield_converges_to_its_closed_form() {
    // RC lowpass at its corner f0 = 1 / (2 pi R C): |H|^2 = 1 / (1 + (a b)^2)
    // with a = R'/R, b = C'/C both uniform within +-5 %. The mask keeps
    // |H| within 0.1 dB of -3.0103 dB, i.e. q_lo <= a b <= q_hi with
    // q = sqrt(10^(-dB/10) - 1).
    let (r, t, m) = (1e3, 0.05, 0.1);
    let c = 100e-9;
    let f0 = 1.0 / (TAU * r * c);
    let n = rc_lowpass(r, c);
    let (out, inp) = ports(&n);
    let nominal = -10.0 * 2f64.log10();
    let q = |db: f64| (10f64.powf(-db / 10.0) - 1.0).sqrt();
    let exact = product_cdf(q(nominal - m), t) - product_cdf(q(nominal + m), t);
    let mask = Mask::new(vec![Limit {
        from_hz: f0,
        to_hz: f0,
        min_db: nominal - m,
        max_db: nominal + m,
    }])
    .unwrap();
    let rules = [
        rule(Scope::Resistors, uniform(t)),
        rule(Scope::Capacitors, uniform(t)),
    ];
    for trials in [1000, 16000] {
        let setup = MonteCarlo {
            out,
            inp,
            freqs_hz: &[f0],
            rules: &rules,
            mask: &mask,
            trials,
            seed: 7,
            worst: 0,
            roots: None,
            delay: None,
            tuning: None,
        };
        let got = monte_carlo(&system(&n), &setup, None)
            .unwrap()
            .yield_fraction;
        let se = (exact * (1.0 - exact) / trials as f64).sqrt();
        assert!(
            (got - exact).abs() <= YIELD_STANDARD_ERRORS * se,
            "{trials} trials: yield {got}, exact {exact}, standard error {se}"
        );
    }
}

/// Rounding of the histogram's bin edges beyond the stated bound of one
/// bin width, in units of the larger of |lo| and |hi| (the first block's
/// extremes): the edges lo + k w and the interpolation in them are a few
/// roundings of numbers of that size (see `Envelope::median_db`).
const BIN_EDGE_ROUNDING: f64 = 8.0 * f64::EPSILON;

/// A Monte Carlo run of the RC lowpass of 1 kohm and 100 nF, both spread
/// 5 % (uniform, so its corner moves), on five frequencies around its
/// corner f0 against one limit at f0 of 0 dB or more: with no upper bound
/// a trial's margin is its gain at f0 minus 0, that is the gain itself,
/// bit for bit. Keeping every trial as a worst one (`worst` = `trials`)
/// thus stores the run's every gain at f0: the column the envelope's f0
/// entry summarizes. Returns the result and the index of f0.
fn rc_stored_run(trials: usize, worst: usize) -> (MonteCarloResult, usize) {
    let (r, c) = (1e3, 100e-9);
    let f0 = 1.0 / (TAU * r * c);
    let n = rc_lowpass(r, c);
    let (out, inp) = ports(&n);
    let freqs = [f0 / 4.0, f0 / 2.0, f0, 2.0 * f0, 4.0 * f0];
    let mask = Mask::new(vec![Limit {
        from_hz: f0,
        to_hz: f0,
        min_db: 0.0,
        max_db: f64::INFINITY,
    }])
    .unwrap();
    let rules = [
        rule(Scope::Resistors, uniform(0.05)),
        rule(Scope::Capacitors, uniform(0.05)),
    ];
    let setup = MonteCarlo {
        out,
        inp,
        freqs_hz: &freqs,
        rules: &rules,
        mask: &mask,
        trials,
        seed: 17,
        worst,
        roots: None,
        delay: None,
        tuning: None,
    };
    (monte_carlo(&system(&n), &setup, None).unwrap(), 2)
}

/// The median of the stored gains, by a sort: the middle value, or the
/// mean of the two middle values for an even count.
fn sorted_median(values: &mut [f64]) -> f64 {
    values.sort_by(f64::total_cmp);
    let m = values.len() / 2;
    if values.len().is_multiple_of(2) {
        (values[m - 1] + values[m]) / 2.0
    } else {
        values[m]
    }
}

#[test]
fn streamed_median_is_within_one_bin_of_the_exact_median_of_a_stored_run() {
    // A run of one block has the exact median and extremes: those of the
    // stored column, bit for bit. Its extremes are the first block's, the
    // range of every longer run's histogram (trial t draws the same
    // values in any run).
    let (first, f0) = rc_stored_run(BLOCK_TRIALS, BLOCK_TRIALS);
    let mut column: Vec<f64> = first.worst.iter().map(|t| t.margin_db).collect();
    assert_eq!(column.len(), BLOCK_TRIALS);
    assert_eq!(first.envelope.median_db[f0], sorted_median(&mut column));
    let (lo, hi) = (first.envelope.min_db[f0], first.envelope.max_db[f0]);
    assert_eq!((lo, hi), (column[0], column[BLOCK_TRIALS - 1]));
    let bound = (hi - lo) / MEDIAN_BINS as f64 + BIN_EDGE_ROUNDING * lo.abs().max(hi.abs());
    // Longer runs, odd and even, the last block partial: the extremes
    // stay exact and the median keeps its bound.
    for trials in [3 * BLOCK_TRIALS + 1001, 3 * BLOCK_TRIALS + 1000] {
        let (r, _) = rc_stored_run(trials, trials);
        let mut column: Vec<f64> = r.worst.iter().map(|t| t.margin_db).collect();
        assert_eq!(column.len(), trials);
        let exact = sorted_median(&mut column);
        let e = &r.envelope;
        assert_eq!(
            (e.min_db[f0], e.max_db[f0]),
            (column[0], column[trials - 1])
        );
        let got = e.median_db[f0];
        assert!(
            (got - exact).abs() <= bound,
            "{trials} trials: median {got} dB, exact {exact} dB, bound {bound:e} dB"
        );
        assert_eq!(r.trials, trials);
    }
}

#[test]
fn monte_carlo_over_several_blocks_is_bit_for_bit_the_same_on_1_and_2_threads() {
    let trials = 2 * BLOCK_TRIALS + 77;
    let on = |threads: usize, worst: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| rc_stored_run(trials, worst).0)
    };
    let (one, two) = (on(1, trials), on(2, trials));
    assert_eq!(bits(&one), bits(&two));
    assert_eq!(one, two);
    let mut indices: Vec<usize> = one.worst.iter().map(|t| t.trial).collect();
    indices.sort_unstable();
    assert_eq!(indices, (0..trials).collect::<Vec<_>>());
    // The worst trials kept by the bounded heap are the first ones of
    // every trial sorted by margin, ties by index.
    let mut sorted = one.worst.clone();
    sorted.sort_by(|a, b| {
        a.margin_db
            .total_cmp(&b.margin_db)
            .then(a.trial.cmp(&b.trial))
    });
    assert_eq!(sorted, one.worst);
    assert_eq!(on(2, 5).worst, one.worst[..5]);
}

#[test]
fn unstable_trials_fail_in_the_proportion_routh_hurwitz_predicts() {
    // A follower whose feedback passes a 30 ns RC lag, on a two-pole
    // op-amp (A0 1e5, GBW 10 MHz, second pole 5 MHz, which the spread
    // moves with the GBW): P(s) = (1 + s/w1)(1 + s/w2)(1 + s tau) + A0 is
    // stable exactly when a2 a1 > a3 a0 (Routh-Hurwitz, common practice),
    // which fails above a critical GBW found here by bisection. With the
    // GBW uniform within +-30 %, the fraction of trials the verdict calls
    // unstable must match the probability of drawing above it within 4
    // binomial standard errors, and every unstable trial fails.
    let (a0, r2, tau) = (1e5, 0.5, 30e-9);
    let routh_stable = |gbw: f64| {
        let (iw1, iw2) = (a0 / (TAU * gbw), 1.0 / (TAU * r2 * gbw));
        let (a3, a2, a1) = (
            tau * iw1 * iw2,
            iw1 * iw2 + tau * (iw1 + iw2),
            iw1 + iw2 + tau,
        );
        a2 * a1 > a3 * (1.0 + a0)
    };
    let (mut lo, mut hi) = (7e6, 13e6);
    assert!(
        routh_stable(lo) && !routh_stable(hi),
        "the critical GBW is inside the spread"
    );
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if routh_stable(mid) {
            lo = mid
        } else {
            hi = mid
        }
    }
    let (nominal, t) = (10e6, 0.3);
    let exact = (nominal * (1.0 + t) - lo) / (2.0 * t * nominal);
    let model = OpAmpModel::TwoPole {
        dc_gain: a0,
        gbw_hz: nominal,
        second_pole_hz: r2 * nominal,
        output_ohm: 0.0,
    };
    let n = crate::active::lagged_follower(model, tau);
    let (out, inp) = ports(&n);
    let mask = Mask::new(vec![Limit {
        from_hz: 1e3,
        to_hz: 1e3,
        min_db: -1.0,
        max_db: 1.0,
    }])
    .unwrap();
    let judge = |n: &Netlist| nocoil::analysis::BoardRoots {
        stable: nocoil::active::is_stable(n).is_ok_and(|v| v.stable),
        roots_rad_s: Vec::new(),
    };
    let rules = [rule(Scope::OpAmpGbw, uniform(t))];
    let trials = 2000;
    let setup = MonteCarlo {
        out,
        inp,
        freqs_hz: &[1e3],
        rules: &rules,
        mask: &mask,
        trials,
        seed: 3,
        // Every trial kept as a worst one, to read each one's verdict.
        worst: trials,
        roots: Some(&judge),
        delay: None,
        tuning: None,
    };
    let r = monte_carlo(&system(&n), &setup, None).unwrap();
    let got = r.unstable as f64 / trials as f64;
    let se = (exact * (1.0 - exact) / trials as f64).sqrt();
    assert!(
        (got - exact).abs() <= YIELD_STANDARD_ERRORS * se,
        "unstable fraction {got}, Routh-Hurwitz {exact} (critical GBW {lo:e} Hz), standard error {se}"
    );
    assert_eq!(r.worst.len(), trials);
    assert!(r.worst.iter().all(|t| t.stable || !t.passed));
    assert_eq!(r.unstable, r.worst.iter().filter(|t| !t.stable).count());
    assert_eq!(
        r.passed + r.unstable,
        trials,
        "every stable trial keeps the loose mask"
    );
}

#[test]
fn the_seed_changes_the_draws_and_progress_counts_every_trial() {
    let rules = [rule(Scope::Capacitors, gaussian(0.05))];
    let run = |seed: u64, progress: Option<&(dyn Fn(usize) + Sync)>| {
        fdnr_run(&rules, 64, 5, seed, 10, progress)
    };
    assert_ne!(run(1, None).envelope, run(2, None).envelope);
    assert_eq!(bits(&run(1, None)), bits(&run(1, None)));
    let calls = AtomicUsize::new(0);
    let highest = AtomicUsize::new(0);
    let progress = |done: usize| {
        calls.fetch_add(1, Ordering::Relaxed);
        highest.fetch_max(done, Ordering::Relaxed);
    };
    run(3, Some(&progress));
    assert_eq!(calls.load(Ordering::Relaxed), 64);
    assert_eq!(highest.load(Ordering::Relaxed), 64);
}

#[test]
fn monte_carlo_refuses_bad_setups_naming_the_offender() {
    let n = gic_highpass(OpAmpModel::Ideal);
    let (out, inp) = ports(&n);
    let sys = system(&n);
    let freqs = [100.0, 1e3];
    let good_mask = Mask::new(vec![Limit {
        from_hz: 0.0,
        to_hz: 1e6,
        min_db: -100.0,
        max_db: 10.0,
    }])
    .unwrap();
    let base = MonteCarlo {
        out,
        inp,
        freqs_hz: &freqs,
        rules: &[],
        mask: &good_mask,
        trials: 4,
        seed: 0,
        worst: 1,
        roots: None,
        delay: None,
        tuning: None,
    };
    let err = |setup: MonteCarlo| monte_carlo(&sys, &setup, None).unwrap_err();
    assert_eq!(
        err(MonteCarlo { trials: 0, ..base }),
        AnalysisError::NoTrials
    );
    assert_eq!(
        err(MonteCarlo {
            freqs_hz: &[],
            ..base
        }),
        AnalysisError::EmptyGrid {
            what: "Monte Carlo frequency"
        }
    );
    let unknown = [rule(Scope::Element("R9".into()), uniform(0.01))];
    assert_eq!(
        err(MonteCarlo {
            rules: &unknown,
            ..base
        }),
        AnalysisError::UnknownElement { name: "R9".into() }
    );
    for (name, kind) in [("V1", "voltage source"), ("XA", "ideal op-amp")] {
        let fixed = [rule(Scope::Element(name.into()), uniform(0.01))];
        let e = err(MonteCarlo {
            rules: &fixed,
            ..base
        });
        assert_eq!(
            e,
            AnalysisError::NotVariable {
                name: name.into(),
                kind
            }
        );
        assert!(e.to_string().contains("expected a resistor"), "{e}");
    }
    // A GBW spread leaves ideal op-amps alone instead of failing.
    let gbw = [rule(Scope::OpAmpGbw, uniform(0.2))];
    let r = monte_carlo(
        &sys,
        &MonteCarlo {
            rules: &gbw,
            ..base
        },
        None,
    )
    .unwrap();
    assert!(r.varied.is_empty());
    // ... and spreads the GBW of the two-pole ones like the single-pole.
    let two_pole = system(&gic_highpass(OpAmpModel::TwoPole {
        dc_gain: 2e5,
        gbw_hz: 1e6,
        second_pole_hz: 2e6,
        output_ohm: 0.0,
    }));
    let r = monte_carlo(
        &two_pole,
        &MonteCarlo {
            rules: &gbw,
            ..base
        },
        None,
    )
    .unwrap();
    let varied: Vec<_> = r
        .varied
        .iter()
        .map(|v| (v.name.as_str(), v.parameter, v.nominal))
        .collect();
    assert_eq!(
        varied,
        [
            ("XA", Parameter::GainBandwidth, 1e6),
            ("XB", Parameter::GainBandwidth, 1e6)
        ]
    );
    let narrow = Mask::new(vec![Limit {
        from_hz: 2e3,
        to_hz: 3e3,
        min_db: -1.0,
        max_db: 1.0,
    }])
    .unwrap();
    assert_eq!(
        err(MonteCarlo {
            mask: &narrow,
            ..base
        }),
        AnalysisError::LimitNotSampled {
            index: 0,
            from_hz: 2e3,
            to_hz: 3e3
        }
    );
}

#[test]
fn masks_refuse_limits_that_cannot_be_checked() {
    assert_eq!(Mask::new(vec![]), Err(AnalysisError::EmptyMask));
    let good = Limit {
        from_hz: 10.0,
        to_hz: 20.0,
        min_db: -1.0,
        max_db: 1.0,
    };
    let bad = [
        Limit {
            from_hz: 30.0,
            ..good
        },
        Limit {
            from_hz: -1.0,
            ..good
        },
        Limit {
            to_hz: f64::INFINITY,
            ..good
        },
        Limit {
            min_db: 2.0,
            ..good
        },
        Limit {
            max_db: f64::NAN,
            ..good
        },
        Limit {
            min_db: f64::NEG_INFINITY,
            max_db: f64::INFINITY,
            ..good
        },
    ];
    for limit in bad {
        let err = Mask::new(vec![good, limit]).unwrap_err();
        assert!(
            matches!(err, AnalysisError::BadLimit { index: 1, .. }),
            "{limit:?}: {err:?}"
        );
        assert!(err.to_string().contains("expected finite 0 <= from <= to"));
    }
    assert_eq!(Mask::new(vec![good]).unwrap().limits(), &[good]);
}

// ---------------------------------------------------------------------
// Signal levels

/// Node gains from closed forms hold to a few eps of the solve.
const LEVEL_REL_TOL: f64 = 1e-12;

#[test]
fn opamp_levels_follow_the_closed_form_gic_node_gains() {
    // Ideal op-amps hold n23 and n45 at V = V(out); R5 carries V / R5, so
    // V(n34) = V (1 + R4 / R5); that current returns through R3 and C2,
    // so V(n12) = V (1 - R4 / (s C2 R3 R5)) (Antoniou 1969 analysis, common
    // practice). V(out) / V(in) is the passive highpass RS, CS into RL || L
    // with L = C2 R1 R3 R5 / R4.
    let n = gic_highpass(OpAmpModel::Ideal);
    let mut sys = system(&n);
    let (rs, cs, rl) = (600.0, 100e-9, 10e3);
    let (r1, c2, r3, r4, r5) = (1e3, 22e-9, 1e3, 1e3, 1e3);
    let l = c2 * r1 * r3 * r5 / r4;
    let freqs = log_grid(10.0, 1e5, 201).unwrap();
    let h = |f: f64| {
        let s = Complex64::new(0.0, TAU * f);
        let zp = rl * s * l / (rl + s * l);
        zp / (rs + 1.0 / (s * cs) + zp)
    };
    let xa = |f: f64| h(f) * (1.0 - r4 / (Complex64::new(0.0, TAU * f) * c2 * r3 * r5));
    let xb = |f: f64| h(f) * (1.0 + r4 / r5);
    let swing = 10.0;
    let (_, inp) = ports(&n);
    let levels = opamp_levels(&mut sys, inp, &freqs, swing).unwrap();
    assert_eq!(levels.len(), 2);
    let mut expected_peaks = Vec::new();
    for (level, gain) in levels.iter().zip([&xa as &dyn Fn(f64) -> Complex64, &xb]) {
        let (k, peak) = freqs
            .iter()
            .map(|&f| gain(f).norm())
            .enumerate()
            .fold((0, 0.0), |best, c| if c.1 > best.1 { c } else { best });
        assert_close_rel(
            &[Complex64::new(20.0 * peak.log10(), 0.0)],
            &[Complex64::new(level.peak_gain_db, 0.0)],
            LEVEL_REL_TOL,
            &level.name,
        );
        assert_eq!(level.peak_freq_hz, freqs[k], "{}", level.name);
        assert!((level.max_input_v - swing / peak).abs() <= LEVEL_REL_TOL * swing / peak);
        assert_eq!(
            level.out_node,
            n.node_index(["n12", "n34"][expected_peaks.len()]).unwrap()
        );
        expected_peaks.push(peak);
    }
    let first = expected_peaks[0] > expected_peaks[1];
    assert_eq!(
        (levels[0].clips_first, levels[1].clips_first),
        (first, !first)
    );
}

#[test]
fn opamp_levels_refuse_bad_swings_grids_and_nodes() {
    let n = gic_highpass(OpAmpModel::Ideal);
    let mut sys = system(&n);
    let (_, inp) = ports(&n);
    for swing in [0.0, -1.0, f64::NAN, f64::INFINITY] {
        let err = opamp_levels(&mut sys, inp, &[1e3], swing).unwrap_err();
        assert!(matches!(err, AnalysisError::BadSwing { .. }), "{err:?}");
    }
    assert_eq!(
        opamp_levels(&mut sys, inp, &[], 10.0),
        Err(AnalysisError::EmptyGrid {
            what: "signal-level frequency"
        })
    );
    for node in [0, 99] {
        let err = opamp_levels(&mut sys, node, &[1e3], 10.0).unwrap_err();
        assert!(matches!(err, AnalysisError::Circuit(_)), "{err:?}");
    }
    let passive = ladder(&chebyshev(0.5, 3), true, 1e3, 1e3);
    let (_, inp) = ports(&passive);
    assert_eq!(
        opamp_levels(&mut system(&passive), inp, &[1e3], 10.0),
        Ok(vec![])
    );
}

#[test]
fn the_passive_build_of_the_demo_elliptic_has_zero_sensitivity_at_its_reflection_zeros() {
    // Orchard (1966) on the pipeline's own passive ideal: the 7th-order
    // elliptic anti-alias lowpass of the README's demo design, equal
    // 1 kohm terminations, reflection zeros at DC and at the real
    // frequencies of the approximation's reflection zeros. The synthesized
    // values hold the same ORCHARD_TOL (measured: at most 7.8e-15).
    let file = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("examples")
        .join("vibration-antialias.toml");
    let spec = nocoil::spec::Spec::load(&file).unwrap();
    let built = nocoil::design::design(&spec).unwrap();
    let prototype = built.prototype().expect("a computed elliptic");
    let mut zeros: Vec<f64> = prototype
        .reflection_roots(0.0)
        .iter()
        .filter(|s| s.im >= 0.0)
        .flat_map(|s| {
            if s.im == 0.0 {
                vec![0.0]
            } else {
                built.spec.band.frequencies_hz(s.im)
            }
        })
        .collect();
    zeros.sort_by(f64::total_cmp);
    assert_eq!(zeros.len(), 4, "DC and three ripple peaks: {zeros:?}");
    assert_orchard(&mut system(&built.passive), &zeros, "demo elliptic");
}

/// The op-amp levels, now read through the sparse solver, agree with the
/// dense solver's node voltages (the oracle) on the elliptic demo's active
/// build: peak gains within 1e-9 dB at the same frequencies, and every
/// point of the level traces within 1e-9 dB.
#[test]
fn opamp_levels_agree_with_the_dense_node_voltages() {
    const LEVEL_TOL_DB: f64 = 1e-9;
    let file = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("examples")
        .join("vibration-antialias.toml");
    let d = nocoil::design::design(&nocoil::spec::Spec::load(&file).unwrap()).unwrap();
    let net = d.active().unwrap().build.netlist;
    let inp = net.require_node("in").unwrap();
    let (lo, hi) = d.view_hz();
    let grid = nocoil::circuit::log_grid(lo, hi, 400).unwrap();
    let mut system = nocoil::circuit::AcSystem::new(&net).unwrap();
    let levels = nocoil::analysis::opamp_levels(&mut system, inp, &grid, 10.0).unwrap();
    let traces = nocoil::analysis::level_traces(&mut system, inp, &grid, &levels).unwrap();
    assert!(!levels.is_empty());
    for (k, &f) in grid.iter().enumerate() {
        let v = system.node_voltages(f).unwrap();
        for (l, trace) in levels.iter().zip(&traces) {
            let dense = 20.0 * (v[l.out_node] / v[inp]).norm().log10();
            assert!(
                (trace[k] - dense).abs() <= LEVEL_TOL_DB,
                "{} at {f} Hz: {} against {dense}",
                l.name,
                trace[k]
            );
            if f == l.peak_freq_hz {
                assert!((l.peak_gain_db - dense).abs() <= LEVEL_TOL_DB, "{}", l.name);
            }
        }
    }
}

/// Wilson's score interval against the worked values of Newcombe,
/// "Two-sided confidence intervals for the single proportion: comparison
/// of seven methods", Statistics in Medicine 1998 (from memory, to the
/// four decimals printed there): 81 of 263 gives 0.2553 to 0.3662, 0 of
/// 20 gives 0 to 0.1611, 1 of 29 gives 0.0061 to 0.1718; and the interval
/// of n of n mirrors that of 0 of n.
#[test]
fn wilson_intervals_match_newcombes_examples() {
    use nocoil::analysis::{wilson_interval, Z95};
    for (passed, trials, lo, hi) in [
        (81, 263, 0.2553, 0.3662),
        (0, 20, 0.0, 0.1611),
        (1, 29, 0.0061, 0.1718),
    ] {
        let (a, b) = wilson_interval(passed, trials, Z95);
        assert!(
            (a - lo).abs() < 5e-5 && (b - hi).abs() < 5e-5,
            "{passed} of {trials}: {a:.4} to {b:.4}, published {lo} to {hi}"
        );
    }
    let (a, b) = wilson_interval(20, 20, Z95);
    assert!((a - (1.0 - 0.1611)).abs() < 5e-5 && b == 1.0, "{a} {b}");
}

/// The DC the op-amps' input bias currents put on a build, against
/// ngspice's operating point of the exported deck of the active on parts
/// build with a current source drawing the bias current from every op-amp
/// input node (the input source at 0 V): at `out` and at the op-amp
/// output nocoil names as furthest from 0 V, within 0.1 % (an FDNR
/// lowpass with its DC-path resistors, GIC band filters with grounded
/// and floating simulated inductors, a GIC highpass).
#[test]
fn bias_offsets_agree_with_the_ngspice_operating_point() {
    use nocoil::export::spice::{deck, AcSweep};
    for file in [
        "examples/vibration-antialias.toml",
        "examples/birdsong-bandpass.toml",
        "examples/mains-notch.toml",
        "examples/rumble-highpass.toml",
    ] {
        // A bipolar input's 100 nA, where the demos' FET inputs draw 20
        // pA: volts at the converters' high-impedance nodes.
        let mut spec = nocoil::spec::Spec::load(std::path::Path::new(file)).unwrap();
        spec.opamp.bias_current_a = 100e-9;
        let d = nocoil::design::design(&spec).unwrap();
        let a = d.active().unwrap();
        let net = &a.on_parts.netlist;
        let bias = a
            .on_parts_figures
            .bias
            .clone()
            .unwrap_or_else(|| panic!("{file}: a DC path for the bias currents"));
        assert_eq!(bias.bias_current_a, d.spec.opamp.bias_current_a);
        let sweep = AcSweep {
            points_per_decade: 1,
            start_hz: 1.0,
            stop_hz: 10.0,
        };
        let text = deck(net, &sweep).unwrap();
        let mut lines: Vec<String> = text
            .lines()
            .filter(|l| {
                let l = l.to_ascii_lowercase();
                !(l.starts_with(".ac") || l.starts_with(".print") || l.trim() == ".end")
            })
            .map(String::from)
            .collect();
        let mut k = 0;
        for e in &net.elements {
            if let Element::OpAmp { plus, minus, .. } = e {
                for node in [*plus, *minus].into_iter().filter(|&n| n != 0) {
                    k += 1;
                    lines.push(format!(
                        "IBIAS{k} {} 0 DC {:e}",
                        net.nodes[node], bias.bias_current_a
                    ));
                }
            }
        }
        lines.push(".op\n.end".to_string());
        let plot = crate::util::ngspice_plot(&lines.join("\n"), "Operating");
        let largest_node = net
            .elements
            .iter()
            .find_map(|e| match e {
                Element::OpAmp { name, out, .. } if *name == bias.largest_designator => {
                    Some(net.nodes[*out].to_ascii_lowercase())
                }
                _ => None,
            })
            .unwrap();
        for (node, ours) in [
            ("out".to_string(), bias.out_v),
            (largest_node, bias.largest_v),
        ] {
            let theirs = plot.vector(&format!("v({node})"))[0].re;
            assert!(
                (ours - theirs).abs() <= 1e-3 * theirs.abs() + 1e-9,
                "{file}: V({node}) nocoil {ours} V, ngspice {theirs} V"
            );
        }
        println!(
            "{file}: out {:.4e} V, {} {:.4e} V",
            bias.out_v, bias.largest_designator, bias.largest_v
        );
    }
}

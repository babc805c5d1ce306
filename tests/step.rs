//! The step response from the circuit's modes: the expansion against the
//! solved transfer, closed forms, and ngspice's transient on the decks.

use nocoil::analysis::{step_figures, step_modes, SETTLING_FRACTIONS};
use nocoil::circuit::{AcSystem, MODES_CHECK};
use nocoil::export::spice::{step_deck, StepResponse};

use num_complex::Complex64;
use std::f64::consts::TAU;

use crate::util::ngspice_tran;

const EXAMPLES: [&str; 3] = [
    "examples/vibration-antialias.toml",
    "examples/rumble-highpass.toml",
    "examples/birdsong-bandpass.toml",
];

/// The passband level of a design, linear.
fn passband_v(d: &nocoil::design::Design) -> f64 {
    10f64.powf(d.passband_level_db() / 20.0)
}

/// An RC lowpass steps as 1 - e^(-t/RC) (common practice): settling to a
/// fraction x takes RC ln(1/x), the 10-90 % rise RC ln 9, no overshoot.
#[test]
fn an_rc_lowpass_steps_as_its_closed_form() {
    let (r, c) = (10e3, 100e-9);
    let n = crate::util::driven(&[("R1", "in", "out", r), ("C1", "out", "0", c)]);
    let modes = step_modes(&n, &nocoil::active::natural_frequencies(&n).unwrap()).unwrap();
    let tau = r * c;
    for t in [0.0, tau / 3.0, tau, 5.0 * tau] {
        let want = 1.0 - (-t / tau).exp();
        assert!(
            (modes.step_at(t) - want).abs() < 1e-12,
            "at {t}: {} against {want}",
            modes.step_at(t)
        );
    }
    let dt = tau / 1000.0;
    for (k, y) in modes.step_samples(dt, 20_001).iter().enumerate() {
        let want = modes.step_at(k as f64 * dt);
        assert!((y - want).abs() < 1e-11, "sample {k}: {y} against {want}");
    }
    for t in [tau / 3.0, tau, 5.0 * tau] {
        let want = t - tau * (1.0 - (-t / tau).exp());
        assert!(
            (modes.step_integral(t) - want).abs() < 1e-12 * tau,
            "integral at {t}"
        );
    }
    let f = step_figures(&modes, 1.0, Some(16));
    assert!((f.final_v - 1.0).abs() < 1e-12);
    assert!((f.rise_time_s.unwrap() / (tau * 9f64.ln()) - 1.0).abs() < 1e-9);
    assert!(f.overshoot_pct.unwrap() < 1e-9);
    for s in &f.settling {
        let want = tau * (1.0 / s.fraction).ln();
        let got = s.time_s.unwrap();
        assert!(
            (got / want - 1.0).abs() < 1e-9,
            "{} : {got} against {want}",
            s.fraction
        );
    }
    assert_eq!(f.settling.len(), SETTLING_FRACTIONS.len() + 1);
    assert_eq!(f.settling[3].fraction, 0.5f64.powi(17));
    // The expansion of an RC lowpass is exact to rounding: every band is
    // placed, half an LSB of 16 bits too.
    assert!(modes.accuracy < 1e-14, "{}", modes.accuracy);
}

/// The modes of every build of the examples reproduce the solved
/// transfer within [`nocoil::circuit::MODES_CHECK`] (the check `modes`
/// itself makes), and their final value is the DC transfer.
#[test]
fn modes_reproduce_the_transfer() {
    for file in EXAMPLES.iter().chain(&[
        "examples/mains-notch.toml",
        "examples/echo-timing-bessel.toml",
        "examples/table-demo.toml",
    ]) {
        assert_modes_reproduce(&crate::util::example(file), file, 0.1);
    }
}

/// The modes of every build of `d` against its solved transfer on 200
/// points from `low_hz` to 1e6 times it, and their final value against
/// the DC transfer.
fn assert_modes_reproduce(d: &nocoil::design::Design, what: &str, low_hz: f64) {
    let a = d.active().unwrap();
    for n in [&d.passive, &a.build.netlist, &a.on_parts.netlist] {
        let modes = step_modes(n, &nocoil::active::natural_frequencies(n).unwrap()).unwrap();
        let (inp, out) = (
            n.require_node("in").unwrap(),
            n.require_node("out").unwrap(),
        );
        let mut system = AcSystem::new(n).unwrap();
        let mut worst = 0.0f64;
        for k in 0..200 {
            let f = low_hz * 1e6f64.powf(k as f64 / 199.0);
            let h = system.transfer(f, out, inp).unwrap();
            let m = modes.transfer_at(Complex64::new(0.0, TAU * f));
            worst = worst.max((h - m).norm() / passband_v(d));
        }
        eprintln!("{what}: {} terms, worst {worst:.1e}", modes.terms.len());
        assert!(worst < MODES_CHECK, "{what}: {worst}");
        if let Ok(h0) = system.transfer(0.0, out, inp) {
            assert!(
                (h0.re - modes.final_value()).abs() < MODES_CHECK * passband_v(d),
                "{what}: {h0} against {}",
                modes.final_value()
            );
        }
    }
}

/// A Chebyshev bandpass at 0.1 Hz from a 12th-order prototype with 1088 and 145 ohm
/// terminations (found by the generative test, seed 8): faer's default
/// eigensolver spun forever on its passive ideal. Its step figures now
/// come out for every build, the modes reproduce the transfer, and the
/// passive ideal's natural frequencies are the closed-form Chebyshev
/// poles (common practice: p_k = -sinh(a) sin(theta_k) + j cosh(a)
/// cos(theta_k), a = asinh(1/epsilon)/N) carried through the bandpass
/// transformation s^2 - p B s + w0^2 = 0.
#[test]
fn a_slow_band_filter_finishes() {
    let (low_hz, high_hz, ripple_db) = (
        9.07342761844386e-2,
        1.0570035102480808e-1,
        0.8459438395377535,
    );
    let text = format!(
        "[filter]\nkind = \"bandpass\"\nfamily = \"chebyshev\"\n\
         passband_edge_hz = [{low_hz:e}, {high_hz:e}]\norder = 12\n\
         passband_ripple_db = {ripple_db:e}\n\
         [terminations]\nsource_ohm = 1088.0\nload_ohm = 145.0\n"
    );
    let spec =
        nocoil::spec::Spec::from_toml(std::path::Path::new("slow-band.toml"), &text).unwrap();
    let d = nocoil::design::design(&spec).unwrap();
    let report = d.step_report(&d.active().unwrap()).unwrap();
    assert!(report.not_computed.is_empty(), "{:?}", report.not_computed);
    assert_modes_reproduce(&d, "slow band", low_hz / 10.0);

    let order = 12;
    let epsilon = (10f64.powf(ripple_db / 10.0) - 1.0).sqrt();
    let a = (1.0 / epsilon).asinh() / order as f64;
    let (w1, w2) = (TAU * low_hz, TAU * high_hz);
    let (b, w0_sq) = (w2 - w1, w1 * w2);
    let want: Vec<Complex64> = (1..=order)
        .flat_map(|k| {
            let theta = (2 * k - 1) as f64 * std::f64::consts::PI / (2 * order) as f64;
            let p = Complex64::new(-a.sinh() * theta.sin(), a.cosh() * theta.cos());
            let root = (p * p * b * b - 4.0 * w0_sq).sqrt();
            [(p * b + root) / 2.0, (p * b - root) / 2.0]
        })
        .collect();
    let got = nocoil::active::natural_frequencies(&d.passive).unwrap();
    let finite: Vec<Complex64> = got
        .iter()
        .copied()
        .filter(|s| s.norm() > 1e-6 * w1)
        .collect();
    assert_eq!(finite.len(), want.len(), "{got:?}");
    for w in &want {
        let nearest = finite
            .iter()
            .map(|g| (g - w).norm())
            .fold(f64::INFINITY, f64::min);
        assert!(
            nearest < 1e-9 * w.norm(),
            "{w}: nearest root {nearest:e} away in {finite:?}"
        );
    }
}

/// ngspice's transient on the step deck of every build of a lowpass
/// (FDNR), a highpass and a bandpass (GIC): at every time point within
/// [`NGSPICE_STEP`] of the reference level, and each settling time
/// within one time step of where ngspice's trace last leaves the band.
/// ngspice's source rises over one time step (see `StepResponse`), so
/// nocoil's response is averaged over that step before comparing.
#[test]
fn step_matches_ngspice_transient() {
    for file in EXAMPLES {
        let d = crate::util::example(file);
        let a = d.active().unwrap();
        for (build, n) in [
            ("passive ideal", &d.passive),
            ("active exact", &a.build.netlist),
            ("active on parts", &a.on_parts.netlist),
        ] {
            let modes = step_modes(n, &nocoil::active::natural_frequencies(n).unwrap()).unwrap();
            let figures = step_figures(&modes, passband_v(&d), None);
            // The 0.1 % settling time and a half more.
            let stop_s = 1.5 * figures.settling[1].time_s.unwrap();
            let step_s = stop_s / 4000.0;
            let trace = ngspice_tran(
                &step_deck(n, &StepResponse { step_s, stop_s }).unwrap(),
                "out",
            );
            // The response to a ramp over h: (Y(t) - Y(t - h)) / h with
            // Y the integral of the step response.
            let integral = |t: f64| modes.step_integral(t.max(0.0));
            let ramp = |t: f64| (integral(t) - integral(t - step_s)) / step_s;
            let (worst, at) = trace
                .iter()
                .map(|&(t, v)| ((v - ramp(t)).abs() / figures.reference_v, t))
                .fold((0.0, 0.0), |a, b| if b.0 > a.0 { b } else { a });
            eprintln!("{file} {build}: worst {worst:.1e} of the reference at {at:e} s (step {step_s:e} s)");
            assert!(worst < NGSPICE_STEP, "{file} {build}: {worst}");
            for s in &figures.settling[..2] {
                let ours = s.time_s.unwrap();
                let band = s.fraction * figures.reference_v;
                let last = trace
                    .iter()
                    .rev()
                    .find(|&&(_, v)| (v - figures.final_v).abs() > band)
                    .map_or(0.0, |p| p.0);
                eprintln!(
                    "  settling {}: ours {ours:e} s, ngspice {last:e} s",
                    s.fraction
                );
                assert!(
                    (ours - last).abs() <= step_s * 1.01,
                    "{file} {build} {}: {ours} against {last}",
                    s.fraction
                );
            }
        }
    }
}

/// See [`step_matches_ngspice_transient`]: the issue asks 1e-3 of the
/// final value.
const NGSPICE_STEP: f64 = 1e-3;

/// A converter resolution adds its band and changes none of the other
/// figures (each band is searched on its own window: with one window,
/// the finest band's, a Bessel lowpass's overshoot read 0.007 % instead
/// of 0.83 % at 24 bits; found by a trial as a new user).
#[test]
fn converter_bits_leave_the_other_figures_alone() {
    let d = crate::util::example("examples/echo-timing-bessel.toml");
    let a = d.active().unwrap();
    let n = &a.on_parts.netlist;
    let modes = step_modes(n, &nocoil::active::natural_frequencies(n).unwrap()).unwrap();
    let plain = step_figures(&modes, 0.5, None);
    for bits in [12, 16, 24] {
        let with = step_figures(&modes, 0.5, Some(bits));
        assert_eq!(with.overshoot_pct, plain.overshoot_pct, "{bits} bits");
        assert_eq!(with.rise_time_s, plain.rise_time_s, "{bits} bits");
        assert_eq!(with.settling[..3], plain.settling[..], "{bits} bits");
        assert_eq!(with.settling.len(), 4);
    }
}

/// A slow tail the active build adds is a note naming the band it is
/// judged at: with `[adc] bits` that band is half an LSB, said in words
/// (a 2 Hz FDNR Bessel lowpass for a 24-bit logger, whose DC-path
/// resistors add a pole near DC; allowed 1 Gohm, as its 1 uF termination
/// capacitors need for the full DC-path factor: within 10 Mohm the
/// tail's size leaves its half-LSB settling beyond what its modes
/// resolve), and the ratio is the figures' own.
#[test]
fn a_slow_tail_is_named_by_its_band() {
    let text = "[filter]\nkind = \"lowpass\"\nfamily = \"bessel\"\npassband_edge_hz = 2.0\n\
                stopband_edge_hz = 20.0\npassband_ripple_db = 3.0103\nstopband_attenuation_db = 30.0\n\
                [terminations]\nsource_ohm = 10000.0\nload_ohm = 10000.0\n[adc]\nbits = 24\n\
                [parts]\ndc_path_max_ohm = 1e9\n";
    let spec = nocoil::spec::Spec::from_toml(std::path::Path::new("logger.toml"), text).unwrap();
    let d = nocoil::design::design(&spec).unwrap();
    let st = d.step_report(&d.active().unwrap()).unwrap();
    let notes = nocoil::export::summary::step_notes(&st, Some(nocoil::active::Method::Fdnr));
    let note = notes
        .iter()
        .find(|n| n.contains("times later"))
        .unwrap_or_else(|| panic!("{notes:?}"));
    assert!(note.contains("settles to half an LSB of 24 bits"), "{note}");
    let (parts, ideal) = (st.active_on_parts.unwrap(), st.passive_ideal.unwrap());
    let ratio = parts.settling[3].time_s.unwrap() / ideal.settling[3].time_s.unwrap();
    assert!(ratio > 100.0, "{ratio}");
    assert!(
        note.contains(&nocoil::export::prose::factor(ratio)),
        "{note}: {ratio}"
    );
}

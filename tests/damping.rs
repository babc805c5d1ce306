//! Tests of the band filters' active builds: the damped resonant loops of
//! elliptic bandstops against their closed form, and a grid of elliptic
//! bandpasses and bandstops (orders 3 to 9, 20 Hz to 20 kHz, 600 ohm to
//! 10 kohm, op-amps from GBW 1 MHz / A0 80 dB to GBW 10 THz / A0 200 dB)
//! whose every active build is stable by nocoil's verdict and, in a live
//! ngspice run of its deck, settles after a step and matches nocoil's AC
//! response.

use std::path::Path;

use num_complex::Complex64;

use crate::util::{assert_close_response, ngspice_ac, ngspice_tran};
use nocoil::active::{ActiveBuild, Note};
use nocoil::circuit::{response, Netlist};
use nocoil::design::design;
use nocoil::export::spice::{deck, step_deck, AcSweep, StepResponse};
use nocoil::spec::Spec;

/// A band filter of the grid.
struct Band {
    kind: &'static str,
    order: usize,
    edges_hz: [f64; 2],
    ohm: f64,
    /// GBW, Hz, and A0, dB.
    opamp: (f64, f64),
    form: &'static str,
    /// More of the design file (an `[active]` table).
    extra: &'static str,
}

impl Band {
    fn name(&self) -> String {
        format!(
            "elliptic {} n={} {:?} Hz {} ohm GBW {:e} {}",
            self.kind, self.order, self.edges_hz, self.ohm, self.opamp.0, self.form
        )
    }

    /// The design file: 0.5 dB / 50 dB, equal terminations, a capacitor
    /// range wide enough that no impedance level is refused.
    fn build(&self) -> (Netlist, ActiveBuild) {
        let text = format!(
            "[filter]\nkind = \"{}\"\nfamily = \"elliptic\"\norder = {}\npassband_edge_hz = [{:?}, {:?}]\npassband_ripple_db = 0.5\nstopband_attenuation_db = 50.0\nform = \"{}\"\n[terminations]\nsource_ohm = {:?}\nload_ohm = {:?}\n[opamp]\ngbw_hz = {:e}\ndc_gain_db = {:?}\n[parts]\ncapacitor_range = [1e-15, 1.0]\n{}",
            self.kind,
            self.order,
            self.edges_hz[0],
            self.edges_hz[1],
            self.form,
            self.ohm,
            self.ohm,
            self.opamp.0,
            self.opamp.1,
            self.extra
        );
        let spec = Spec::from_toml(Path::new("band.toml"), &text)
            .unwrap_or_else(|e| panic!("{}: {e}", self.name()));
        let d = design(&spec).unwrap_or_else(|e| panic!("{}: {e}", self.name()));
        let a = d
            .active()
            .unwrap_or_else(|e| panic!("{}: {e}", self.name()));
        (d.passive, a.build)
    }
}

/// The grid: every kind and order once, the band's centre, impedance
/// level, op-amp and ladder form taken in turn from short lists so the
/// 14 cases reach every corner of the range (20 Hz, 1 kHz and 20 kHz
/// centres; 600 ohm to 10 kohm; the slowest, a middle and the near-ideal
/// op-amp; both ladder forms).
fn grid() -> Vec<Band> {
    let bands = [[14.0, 28.0], [400.0, 2500.0], [14e3, 28e3]];
    let ohms = [600.0, 2200.0, 10e3];
    let opamps = [(1e6, 80.0), (10e6, 100.0), (10e12, 200.0)];
    let forms = ["min_capacitor", "min_inductor"];
    let mut cases = Vec::new();
    for (k, kind) in ["bandpass", "bandstop"].into_iter().enumerate() {
        for order in 3..=9 {
            let i = order + k;
            cases.push(Band {
                kind,
                order,
                edges_hz: bands[i % 3],
                ohm: ohms[(i / 3) % 3],
                opamp: opamps[(i + k) % 3],
                form: forms[order % 2],
                extra: "",
            });
        }
    }
    cases
}

#[test]
fn damped_loops_sit_at_the_closed_form_roots() {
    // Every resonator of a loop or cutset gets one quality factor Q, so
    // the loop's natural frequencies are the roots of
    // s^2 + (w0/Q) s + w0^2 = 0 (closed form, common practice): |s| = w0
    // and damping ratio 1/(2Q). The build's own op-amps (GBW 10 THz,
    // A0 200 dB, whose pole at GBW/A0 = 1 kHz sits on the loop) move the
    // ratio by about 1e-9 (measured 1.1e-9 on the 5th-order case, 2.2e-3
    // of the 5e-7 that Q = 1e6 gives), so the roots must match to 1e-6 in
    // frequency and 1e-2 in damping ratio relative to 1/(2Q).
    for (order, form) in [
        (3, "min_capacitor"),
        (5, "min_inductor"),
        (7, "min_capacitor"),
    ] {
        let case = Band {
            kind: "bandstop",
            order,
            edges_hz: [400.0, 2500.0],
            ohm: 600.0,
            opamp: (10e12, 200.0),
            form,
            // The converters as balanced: compensation scales each one's
            // value at the balance frequency by its own factor, which
            // leaves the pairs' Q no longer equal (measured: damping
            // ratio 7.8e-7 against 1/(2Q) = 5e-7).
            extra: "[active]\noptimize = false\n",
        };
        let (_, build) = case.build();
        let q = build
            .notes
            .iter()
            .find_map(|n| match n {
                Note::Damped { q, .. } => Some(*q),
                _ => None,
            })
            .unwrap_or_else(|| panic!("{}: no damping note", case.name()));
        let root = build.stability.unwrap().least_damped.unwrap();
        let f0 = (400.0f64 * 2500.0).sqrt();
        assert!(
            (root.frequency_hz / f0 - 1.0).abs() < 1e-6
                && (root.damping_ratio * 2.0 * q - 1.0).abs() < 1e-2,
            "{}: Q {q}, least-damped root {root:?}",
            case.name()
        );
    }
}

#[test]
fn band_filter_grid_builds_stably_and_ngspice_agrees() {
    // The AC response of every deck against ngspice (an independent
    // simulator) within the project's 0.01 dB wherever it is above
    // -60 dB; and a step on every deck, run in ngspice for 30 periods of
    // the lower passband edge: bounded (peak within twice the passive
    // ideal's) and settling: the last quarter of the run moves no more
    // than the third (to ngspice's default relative tolerance, 1e-3 of the
    // peak) and no more than the passive ideal's last quarter does plus
    // 5 % of its peak (narrow elliptic bandpasses still ring after 30
    // periods, the passive ideal as much as its builds). The end value
    // is not compared with the passive ideal's: with A0 = 80 dB the
    // floating simulated inductors lose gain towards DC (the 20 kHz
    // bandstop on 1 MHz op-amps passes DC at -30 dB, settling there with
    // a 10 ms time constant; measured), which the AC check sees and this
    // one need not.
    const TOL_DB: f64 = 0.01;
    const TOL_DEG: f64 = 0.066;
    const FLOOR_DB: f64 = -60.0;
    const PEAK_FACTOR: f64 = 2.0;
    const SETTLED: f64 = 0.05;
    const NGSPICE_RELTOL: f64 = 1e-3;
    let mut failures = Vec::new();
    for case in grid() {
        let (passive, build) = case.build();
        let name = case.name();
        match build.stability {
            Some(v) if v.stable => {}
            other => failures.push(format!("{name}: verdict {other:?}")),
        }
        let [low, high] = case.edges_hz;
        let sweep = AcSweep {
            points_per_decade: 40,
            start_hz: low / 4.0,
            stop_hz: high * 4.0,
        };
        let spice = ngspice_ac(&deck(&build.netlist, &sweep).unwrap());
        let f: Vec<f64> = spice.iter().map(|p| p.0).collect();
        let ours = response(&build.netlist, &f).unwrap().h;
        let keep: Vec<usize> = (0..f.len())
            .filter(|&i| 20.0 * ours[i].norm().log10() > FLOOR_DB)
            .collect();
        let pick = |v: &[Complex64]| keep.iter().map(|&i| v[i]).collect::<Vec<_>>();
        let theirs: Vec<Complex64> = spice.iter().map(|p| p.1).collect();
        assert_close_response(
            &keep.iter().map(|&i| f[i]).collect::<Vec<_>>(),
            &pick(&theirs),
            &pick(&ours),
            TOL_DB,
            TOL_DEG,
            &name,
        );
        let stop_s = 30.0 / low;
        let tran = StepResponse {
            step_s: stop_s / 20_000.0,
            stop_s,
        };
        let run = |n: &Netlist| ngspice_tran(&step_deck(n, &tran).unwrap(), "out");
        let (p, a) = (run(&passive), run(&build.netlist));
        let peak = |t: &[(f64, f64)]| t.iter().map(|x| x.1.abs()).fold(0.0, f64::max);
        let spread = |t: &[(f64, f64)], quarter: usize| {
            let q = t.len() / 4;
            let part = &t[quarter * q..(quarter + 1) * q];
            let hi = part.iter().map(|x| x.1).fold(f64::NEG_INFINITY, f64::max);
            let lo = part.iter().map(|x| x.1).fold(f64::INFINITY, f64::min);
            hi - lo
        };
        let bounded = peak(&a) <= PEAK_FACTOR * peak(&p);
        let settling = spread(&a, 3) <= spread(&a, 2) + NGSPICE_RELTOL * peak(&p)
            && spread(&a, 3) <= spread(&p, 3) + SETTLED * peak(&p);
        if !(bounded && settling) {
            failures.push(format!(
                "{name}: step peak {:.4} (passive {:.4}), spread of the last two quarters {:.5} and {:.5}",
                peak(&a),
                peak(&p),
                spread(&a, 2),
                spread(&a, 3)
            ));
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

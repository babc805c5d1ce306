//! Output noise: closed forms, Nyquist's theorem, and ngspice's own
//! `.noise` analysis on the exported decks.

use nocoil::analysis::{
    integrate, noise_band_grid, output_noise, NoiseKind, NOISE_POINTS_PER_DECADE,
};
use nocoil::circuit::{AcSystem, Element, Netlist, OpAmpNoise, BOLTZMANN_J_PER_K};
use nocoil::export::spice::{noise_deck, AcSweep, DeckNoise};

use crate::util::ngspice_plot;

const T_K: f64 = 300.0;

fn four_kt() -> f64 {
    4.0 * BOLTZMANN_J_PER_K * T_K
}

/// A resistor from the (shorted) source to the output, open there: the
/// open-circuit noise sqrt(4kTR) (Johnson and Nyquist, common practice).
#[test]
fn a_resistor_shows_its_open_circuit_noise() {
    let mut n = crate::util::driven(&[("R1", "in", "out", 10e3), ("C1", "out", "0", 1e-15)]);
    n.title = "open resistor".into();
    let out = n.require_node("out").unwrap();
    let s = output_noise(&n, out, &[1.0, 10.0, 100.0], &OpAmpNoise::NOISELESS, T_K).unwrap();
    for &p in &s.total_v2_per_hz {
        let want = four_kt() * 10e3;
        assert!((p / want - 1.0).abs() < 1e-6, "{p} against {want}");
    }
    assert_eq!(s.sources.len(), 1);
    assert_eq!(s.sources[0].kind, NoiseKind::Thermal);
}

/// An RC lowpass integrates to kT/C whatever R (common practice).
#[test]
fn an_rc_lowpass_integrates_to_kt_over_c() {
    for (r, c) in [(1e3, 1e-9), (47e3, 220e-12), (100.0, 1e-6)] {
        let n = crate::util::driven(&[("R1", "in", "out", r), ("C1", "out", "0", c)]);
        let out = n.require_node("out").unwrap();
        let corner = 1.0 / (std::f64::consts::TAU * r * c);
        let grid = noise_band_grid(corner * 1e-5, corner * 1e5);
        let s = output_noise(&n, out, &grid, &OpAmpNoise::NOISELESS, T_K).unwrap();
        let v2 = integrate(&grid, &s.total_v2_per_hz, |_| 1.0);
        // The band stops at 1e5 corners: the tail beyond holds
        // kT/C x 2/(pi 1e5) of it, and 1e-5 corners below a fraction 1e-5.
        let want = BOLTZMANN_J_PER_K * T_K / c
            * (1.0 - 2.0 / (std::f64::consts::PI * 1e5) - 1e-5 * 2.0 / std::f64::consts::PI);
        assert!(
            (v2 / want - 1.0).abs() < 1e-4,
            "R {r} C {c}: {v2} against {want}"
        );
    }
}

/// The output noise of a passive network is 4kT Re Z_out at every
/// frequency (Nyquist's theorem), Z_out found here by a second, unrelated
/// route: a 1 A test current into the output with the source shorted.
#[test]
fn the_passive_ideal_obeys_nyquist() {
    for file in [
        "examples/vibration-antialias.toml",
        "examples/birdsong-bandpass.toml",
        "examples/rumble-highpass.toml",
        "examples/mains-notch.toml",
    ] {
        let d = crate::util::example(file);
        let passive = &d.passive;
        let out = passive.require_node("out").unwrap();
        let (lo, hi) = d.view_hz();
        let grid = noise_band_grid(lo, hi);
        let s = output_noise(passive, out, &grid, &OpAmpNoise::NOISELESS, T_K).unwrap();
        // Z_out by a forward solve: the source shorted (AC 0), a test
        // source Vt behind Rt at the output, V(out)/V(t) = Z / (Z + Rt).
        let mut probe = passive.clone();
        for e in &mut probe.elements {
            if let Element::VoltageSource { ac_volt, .. } = e {
                *ac_volt = 0.0;
            }
        }
        let t = probe.node("t");
        probe
            .add(Element::VoltageSource {
                name: "VT".into(),
                pos: t,
                neg: 0,
                ac_volt: 1.0,
            })
            .unwrap();
        let rt = 1e3;
        probe
            .add(Element::Resistor {
                name: "RT".into(),
                a: t,
                b: out,
                ohm: rt,
            })
            .unwrap();
        let mut system = AcSystem::new(&probe).unwrap();
        for (k, &f) in grid.iter().enumerate() {
            let h = system.transfer(f, out, t).unwrap();
            let z = rt * h / (1.0 - h);
            let want = four_kt() * z.re;
            let got = s.total_v2_per_hz[k];
            assert!(
                (got / want - 1.0).abs() < 1e-9,
                "{file} at {f} Hz: {got} against {want}"
            );
        }
    }
}

/// A noisy op-amp for the comparisons: 5 nV/sqrt(Hz) with a 10 Hz corner,
/// 1 pA/sqrt(Hz) with a 200 Hz corner.
const TEST_OPAMP: OpAmpNoise = OpAmpNoise {
    en_v_per_rthz: 5e-9,
    en_corner_hz: 10.0,
    in_a_per_rthz: 1e-12,
    in_corner_hz: 200.0,
};

/// Worst difference, dB, between nocoil's output noise density and
/// ngspice's `.noise` on the deck nocoil writes, over the deck's grid.
fn worst_against_ngspice(n: &Netlist, from_hz: f64, to_hz: f64) -> f64 {
    let sweep = AcSweep {
        points_per_decade: 20,
        start_hz: from_hz,
        stop_hz: to_hz,
    };
    let noise = DeckNoise {
        opamp: TEST_OPAMP,
        temperature_k: T_K,
    };
    let plot = ngspice_plot(&noise_deck(n, &sweep, &noise).unwrap(), "Noise Spectral");
    let freq: Vec<f64> = plot.vector("frequency").iter().map(|z| z.re).collect();
    let theirs: Vec<f64> = plot
        .vector("onoise_spectrum")
        .iter()
        .map(|z| z.re)
        .collect();
    let out = n.require_node("out").unwrap();
    let ours = output_noise(n, out, &freq, &TEST_OPAMP, T_K).unwrap();
    freq.iter()
        .zip(&theirs)
        .zip(&ours.total_v2_per_hz)
        .map(|((_, &t), &o)| (10.0 * o.log10() - 20.0 * t.log10()).abs())
        .fold(0.0, f64::max)
}

/// ngspice's noise analysis on the decks of a lowpass (FDNR), a highpass
/// and a bandpass (GIC), all three builds: the output density within
/// [`NGSPICE_NOISE_DB`] at every point of its grid.
#[test]
fn output_noise_matches_ngspice_on_every_build() {
    for file in [
        "examples/vibration-antialias.toml",
        "examples/rumble-highpass.toml",
        "examples/birdsong-bandpass.toml",
    ] {
        let d = crate::util::example(file);
        let a = d.active().unwrap();
        let (lo, hi) = d.view_hz();
        for (build, n) in [
            ("passive ideal", &d.passive),
            ("active exact", &a.build.netlist),
            ("active on parts", &a.on_parts.netlist),
        ] {
            let worst = worst_against_ngspice(n, lo / 10.0, hi);
            eprintln!("{file} {build}: worst {worst:.2e} dB");
            assert!(worst < NGSPICE_NOISE_DB, "{file} {build}: {worst} dB");
        }
    }
}

/// See [`output_noise_matches_ngspice_on_every_build`]. Measured: 1.5e-6
/// dB on every build, which is ngspice's Boltzmann constant (the 2014
/// CODATA value, 1.38064852e-23 J/K, 3.5e-7 below the exact SI one this
/// project uses); 1e-4 dB leaves room for its solver's rounding, far
/// inside the 0.1 dB the noise analysis was asked to hold.
const NGSPICE_NOISE_DB: f64 = 1e-4;

/// ngspice's integrated output noise over a band (its power-law
/// integration between its points, 50 per decade: ngspice 39 gives NaN
/// for this deck at 100 per decade and on a 2,000-point linear grid,
/// measured) against nocoil's
/// trapezoidal rule in ln f on its own grid over the same band: within
/// [`NGSPICE_TOTAL_DB`].
#[test]
fn integrated_noise_matches_ngspice() {
    for file in [
        "examples/vibration-antialias.toml",
        "examples/birdsong-bandpass.toml",
    ] {
        let d = crate::util::example(file);
        let a = d.active().unwrap();
        let (lo, hi) = d.view_hz();
        let n = &a.on_parts.netlist;
        let sweep = AcSweep {
            points_per_decade: 50,
            start_hz: lo,
            stop_hz: hi,
        };
        let noise = DeckNoise {
            opamp: TEST_OPAMP,
            temperature_k: T_K,
        };
        let plots = crate::util::ngspice_run(&noise_deck(n, &sweep, &noise).unwrap());
        let spectrum = plots
            .iter()
            .find(|p| p.name.starts_with("Noise Spectral"))
            .unwrap();
        let freq: Vec<f64> = spectrum.vector("frequency").iter().map(|z| z.re).collect();
        let total = plots
            .iter()
            .find(|p| p.name.starts_with("Integrated Noise"))
            .unwrap();
        let theirs = total.vector("v(onoise_total)")[0].re;
        let grid = noise_band_grid(freq[0], freq[freq.len() - 1]);
        let out = n.require_node("out").unwrap();
        let ours = integrate(
            &grid,
            &output_noise(n, out, &grid, &TEST_OPAMP, T_K)
                .unwrap()
                .total_v2_per_hz,
            |_| 1.0,
        )
        .sqrt();
        let db = 20.0 * (ours / theirs).log10();
        eprintln!("{file}: {ours:e} V against {theirs:e} V, {db:.2e} dB");
        assert!(db.abs() < NGSPICE_TOTAL_DB, "{file}: {db} dB");
    }
}

/// See [`integrated_noise_matches_ngspice`]: the issue asks 0.1 dB.
const NGSPICE_TOTAL_DB: f64 = 0.1;

/// The A-weighting against the values IEC 61672-1 tabulates (from
/// memory, to the table's 0.1 dB), at the exact base-ten frequencies
/// behind its nominal ones (31.5 Hz is 10^1.5 = 31.62 Hz).
#[test]
fn a_weighting_matches_the_standard_table() {
    for (tenths, want_db) in [
        (15, -39.4),
        (18, -26.2),
        (21, -16.1),
        (24, -8.6),
        (27, -3.2),
        (30, 0.0),
        (33, 1.2),
        (36, 1.0),
        (39, -1.1),
        (42, -6.6),
    ] {
        let f = 10f64.powf(tenths as f64 / 10.0);
        let got = 10.0 * nocoil::analysis::a_weighting(f).log10();
        assert!(
            (got - want_db).abs() <= 0.05 + 1e-9,
            "{f} Hz: {got:.3} dB, the table {want_db}"
        );
    }
}

/// A design file with a Q = 20 bandpass (its noise peaks in a band 5 %
/// wide) for the grid tests.
const Q20_BANDPASS: &str = "[filter]\nkind = \"bandpass\"\nfamily = \"butterworth\"\norder = 3\npassband_edge_hz = [975.6, 1025.0]\n[terminations]\nsource_ohm = 1000\nload_ohm = 1000\n";

/// The integrated noise of every build of the examples and of a Q = 20
/// bandpass moves by less than [`GRID_DOUBLING_DB`] when the
/// integration grid is doubled (the trapezoidal rule in ln f on
/// `NOISE_POINTS_PER_DECADE`).
#[test]
fn integrals_hold_when_the_grid_doubles() {
    let mut specs: Vec<nocoil::spec::Spec> = [
        "examples/vibration-antialias.toml",
        "examples/rumble-highpass.toml",
        "examples/birdsong-bandpass.toml",
        "examples/mains-notch.toml",
    ]
    .iter()
    .map(|f| nocoil::spec::Spec::load(std::path::Path::new(f)).unwrap())
    .collect();
    specs.push(
        nocoil::spec::Spec::from_toml(std::path::Path::new("q20.toml"), Q20_BANDPASS).unwrap(),
    );
    let mut worst = 0.0f64;
    for spec in &specs {
        let d = nocoil::design::design(spec).unwrap();
        let a = d.active().unwrap();
        let [lo, hi] = d.noise_band_hz();
        let grid = noise_band_grid(lo, hi);
        let doubled: Vec<f64> = grid
            .windows(2)
            .flat_map(|w| [w[0], (w[0] * w[1]).sqrt()])
            .chain([hi])
            .collect();
        for n in [&d.passive, &a.build.netlist, &a.on_parts.netlist] {
            let out = n.require_node("out").unwrap();
            let total = |g: &[f64]| {
                integrate(
                    g,
                    &output_noise(n, out, g, &TEST_OPAMP, T_K)
                        .unwrap()
                        .total_v2_per_hz,
                    |_| 1.0,
                )
            };
            let db = 10.0 * (total(&doubled) / total(&grid)).log10();
            worst = worst.max(db.abs());
        }
    }
    eprintln!("worst change on doubling: {worst:.2e} dB");
    assert!(worst < GRID_DOUBLING_DB, "{worst} dB");
}

/// See [`integrals_hold_when_the_grid_doubles`].
const GRID_DOUBLING_DB: f64 = 1e-3;

/// The largest input the dynamic range states, driven in ngspice's
/// transient as a sine at its frequency into the active on parts build:
/// every op-amp output stays within the swing, the slew rate and the
/// largest output current (checked on the waveforms, after the start-up
/// transient; the current from the node voltages through the resistors
/// and capacitors on the output), and the limiting op-amp comes within
/// [`TIGHT`] of its limit, so the figure is neither unsafe nor needlessly
/// cautious. The Bessel example's limit is an output current.
#[test]
fn dynamic_range_input_stays_within_swing_slew_and_current_in_ngspice() {
    use nocoil::circuit::Element;
    use nocoil::export::spice::{step_deck, StepResponse};
    for file in [
        "examples/vibration-antialias.toml",
        "examples/birdsong-bandpass.toml",
        "examples/echo-timing-bessel.toml",
    ] {
        let spec = nocoil::spec::Spec::load(std::path::Path::new(file)).unwrap();
        let d = nocoil::design::design(&spec).unwrap();
        let a = d.active().unwrap();
        let r = d.noise_figures(&a).unwrap().dynamic_range.unwrap();
        let n = &a.on_parts.netlist;
        let period = 1.0 / r.at_hz;
        // Long enough for the start-up transient to die (the slowest
        // settling to 0.1 % of the step response), then ten periods.
        let settle = d.step_report(&a).unwrap().active_on_parts.unwrap().settling[1]
            .time_s
            .unwrap();
        let start = (settle / period).ceil() * period;
        let stop_s = start + 10.0 * period;
        let step_s = period / 200.0;
        let deck = step_deck(n, &StepResponse { step_s, stop_s }).unwrap();
        // The step's pulse becomes the sine.
        let line = deck.lines().find(|l| l.starts_with("V1 ")).unwrap();
        let sine = format!("V1 in 0 DC 0 SIN(0 {} {})", r.max_input_v_peak, r.at_hz);
        let deck = deck.replace(line, &sine);
        let plot = crate::util::ngspice_plot(&deck, "Transient");
        let time: Vec<f64> = plot.vector("time").iter().map(|z| z.re).collect();
        let wave = |node: usize| -> Vec<f64> {
            match node {
                0 => vec![0.0; time.len()],
                _ => plot
                    .vector(&format!("v({})", n.nodes[node]))
                    .iter()
                    .map(|z| z.re)
                    .collect(),
            }
        };
        let mut nearest = 0.0f64;
        for e in &n.elements {
            let Element::OpAmp { name, out, .. } = e else {
                continue;
            };
            let v = wave(*out);
            // (other end's waveform, conductance, capacitance) of every
            // resistor and capacitor on the output.
            let attached: Vec<(Vec<f64>, f64, f64)> = n
                .elements
                .iter()
                .filter_map(|x| {
                    let (a, b, g, c) = match *x {
                        Element::Resistor { a, b, ohm, .. } => (a, b, 1.0 / ohm, 0.0),
                        Element::Capacitor { a, b, farad, .. } => (a, b, 0.0, farad),
                        _ => return None,
                    };
                    let other = match (a == *out, b == *out) {
                        (true, false) => b,
                        (false, true) => a,
                        _ => return None,
                    };
                    Some((wave(other), g, c))
                })
                .collect();
            let (mut peak, mut slope, mut current) = (0.0f64, 0.0f64, 0.0f64);
            for k in 1..time.len() {
                if time[k] < start {
                    continue;
                }
                let dt = time[k] - time[k - 1];
                peak = peak.max(v[k].abs());
                slope = slope.max(((v[k] - v[k - 1]) / dt).abs());
                // The capacitor current by the trapezoid's midpoint rule,
                // against the resistor current at the same midpoint.
                let i: f64 = attached
                    .iter()
                    .map(|(w, g, c)| {
                        let (d1, d0) = (v[k] - w[k], v[k - 1] - w[k - 1]);
                        g * 0.5 * (d1 + d0) + c * (d1 - d0) / dt
                    })
                    .sum();
                current = current.max(i.abs());
            }
            let (swing, slew, most) = (
                spec.opamp.swing_v,
                spec.opamp.slew_v_per_s,
                spec.opamp.output_current_a,
            );
            assert!(
                peak <= swing * (1.0 + TIGHT),
                "{file} {name}: {peak} V peak, swing {swing}"
            );
            assert!(
                slope <= slew * (1.0 + TIGHT),
                "{file} {name}: {slope} V/s, slew {slew}"
            );
            assert!(
                current <= most * (1.0 + TIGHT),
                "{file} {name}: {current} A peak, largest {most}"
            );
            nearest = nearest.max((peak / swing).max(slope / slew).max(current / most));
        }
        eprintln!(
            "{file}: limited by {} ({:?}) at {} Hz; nearest op-amp at {nearest:.4} of its limit",
            r.limited_by, r.headroom, r.at_hz
        );
        assert!(
            nearest > 1.0 - TIGHT,
            "{file}: the nearest op-amp reaches only {nearest} of its limit"
        );
    }
}

/// The converter levels' claim, checked by ngspice's noise analysis on
/// the exported decks of the active on parts build with the chosen levels
/// and with every converter on its nearest capacitor values: the
/// integrated output noise falls by the stated noise gain within
/// [`LEVEL_CLAIM_DB`] (measured 1e-4 dB: the densities agree to 2e-6
/// dB, see output_noise_matches_ngspice_on_every_build, and ngspice's
/// density is integrated by the same rule over the same band at the same
/// 200 points per decade). The choice itself is made on the exact values
/// before snapping, and its prediction stays within
/// [`LEVEL_PREDICTION_DB`] of the builds on parts (measured worst 0.045
/// dB: the snapped resistors and trims move each converter's noise a
/// little). Over the examples whose levels move: an
/// FDNR lowpass, a GIC bandpass and a GIC bandstop.
#[test]
fn converter_levels_lower_the_noise_as_stated_in_ngspice() {
    for file in [
        "examples/vibration-antialias.toml",
        "examples/birdsong-bandpass.toml",
        "examples/mains-notch.toml",
    ] {
        let d = crate::util::example(file);
        let a = d.active().unwrap();
        assert!(a.levels.used, "{file}: levels not moved");
        let stated = d.noise_figures(&a).unwrap().levels_gain.unwrap();
        let nearest = nocoil::realize::snap_build(
            &d.passive,
            &a.build,
            &d.spec.parts,
            &d.passbands_hz(),
            None,
        )
        .unwrap();
        let band = d.noise_band_hz();
        let sweep = AcSweep {
            points_per_decade: NOISE_POINTS_PER_DECADE,
            start_hz: band[0],
            // One point past the band's end: ngspice's decade grid from
            // the start does not land on it.
            stop_hz: band[1] * 10f64.powf(1.0 / NOISE_POINTS_PER_DECADE as f64),
        };
        let noise = DeckNoise {
            opamp: d.spec.opamp.noise,
            temperature_k: d.spec.noise.temperature_k,
        };
        // ngspice's own integral is NaN on the bandstop's decks (its
        // power law between points blows up beside the notch, see
        // integrated_noise_matches_ngspice), so its density is integrated
        // by the trapezoidal rule in ln f.
        let total = |n: &Netlist| {
            let spectrum = ngspice_plot(&noise_deck(n, &sweep, &noise).unwrap(), "Noise Spectral");
            let freq: Vec<f64> = spectrum.vector("frequency").iter().map(|z| z.re).collect();
            let v2: Vec<f64> = spectrum
                .vector("onoise_spectrum")
                .iter()
                .map(|z| z.re * z.re)
                .collect();
            integrate_to(&freq, &v2, band[1]).sqrt()
        };
        let measured = 20.0 * (total(&nearest.netlist) / total(&a.on_parts.netlist)).log10();
        eprintln!(
            "{file}: noise lower by {measured:.4} dB in ngspice, {:.4} dB stated, {:.4} dB predicted; range {:.4} dB wider, {:.4} dB predicted",
            stated.noise_db, a.levels.noise_gain_db, stated.range_db, a.levels.gain_db
        );
        assert!(
            (measured - stated.noise_db).abs() < LEVEL_CLAIM_DB,
            "{file}: {measured} dB against {} dB",
            stated.noise_db
        );
        assert!(stated.range_db > 0.0, "{file}: {stated:?}");
        let (low_f, high_f) = d.spec.parts.capacitor_range_f;
        for c in &a.levels.converters {
            assert!(
                (low_f..=high_f).contains(&c.chosen_f),
                "{file}: {} = {} F outside the range",
                c.capacitor,
                c.chosen_f
            );
        }
        assert!(
            (a.levels.gain_db - stated.range_db).abs() < LEVEL_PREDICTION_DB,
            "{file}: predicted {} dB, on parts {} dB",
            a.levels.gain_db,
            stated.range_db
        );
    }
}

/// See [`converter_levels_lower_the_noise_as_stated_in_ngspice`].
const LEVEL_CLAIM_DB: f64 = 0.002;

/// The integral of a density over its grid up to `end_hz` (inside the
/// last interval), f S(f) taken linear in ln f across that interval, as
/// the trapezoidal rule takes it.
fn integrate_to(freq_hz: &[f64], v2: &[f64], end_hz: f64) -> f64 {
    let inside = freq_hz.iter().take_while(|&&f| f <= end_hz).count();
    let (f0, f1) = (freq_hz[inside - 1], freq_hz[inside]);
    let x = (end_hz / f0).ln() / (f1 / f0).ln();
    let (a, b) = (v2[inside - 1] * f0, v2[inside] * f1);
    let end = a + x * (b - a);
    integrate(&freq_hz[..inside], &v2[..inside], |_| 1.0) + 0.5 * (a + end) * (end_hz / f0).ln()
}

/// See [`converter_levels_lower_the_noise_as_stated_in_ngspice`].
const LEVEL_PREDICTION_DB: f64 = 0.1;

/// How close to the limit the driven waveforms come: 1 % (the level grid
/// and the transient's time step each place the peak within a fraction
/// of that).
const TIGHT: f64 = 0.01;

/// A dynamic range below an ideal N-bit converter's full-scale SNR,
/// 6.02 N + 1.76 dB (common practice), is a note naming both figures; a
/// converter the filter out-ranges gets none.
#[test]
fn a_dynamic_range_below_the_converter_is_a_note() {
    let text = |bits: u32| {
        format!(
            "[filter]\nkind = \"lowpass\"\nfamily = \"butterworth\"\npassband_edge_hz = 1000.0\n\
             stopband_edge_hz = 4000.0\npassband_ripple_db = 3.0103\nstopband_attenuation_db = 40.0\n\
             [terminations]\nsource_ohm = 1000.0\nload_ohm = 1000.0\n[adc]\nbits = {bits}\n"
        )
    };
    for (bits, noted) in [(24, true), (12, false)] {
        let spec =
            nocoil::spec::Spec::from_toml(std::path::Path::new("adc.toml"), &text(bits)).unwrap();
        let d = nocoil::design::design(&spec).unwrap();
        let n = d.noise_figures(&d.active().unwrap()).unwrap();
        let range = n.dynamic_range.as_ref().unwrap().range_db;
        let notes = nocoil::export::summary::noise_notes(&n);
        let note = notes.iter().find(|s| s.contains("-bit converter"));
        eprintln!("{bits} bits, {range:.2} dB: {note:?}");
        assert_eq!(note.is_some(), noted, "{bits} bits, {range} dB: {notes:?}");
        if let Some(note) = note {
            let converter_db = 6.02 * f64::from(bits) + 1.76;
            assert!(range < converter_db);
            assert!(
                note.contains(&format!("{converter_db:.2} dB of an ideal {bits}-bit")),
                "{note}"
            );
        }
    }
}

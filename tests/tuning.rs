//! The tuning procedure: each step's reading, checked live in ngspice on
//! the soldered deck set up as the step says, and what tuning does to the
//! board against untrimmed parts.

use std::path::Path;

use nocoil::active::with_model;
use nocoil::circuit::{response, OpAmpModel};
use nocoil::design::{design, ActiveDesign, Design};
use nocoil::realize::{soldered, Reading};
use nocoil::spec::Spec;

use crate::util::{scratch, spec_in};

/// A Q = 20 Chebyshev bandpass at 1 kHz and a 60 Hz Chebyshev bandstop
/// (the band filters the design-for-yield issue names) and a 40 kHz
/// bandpass on slow op-amps, in scenarios of this project's own.
pub const BAND_FILTERS: [(&str, &str); 3] = [
    // Slow op-amps for the band: the converters, compensated, realize
    // with ideal op-amps values 30 % from the ladder's, so each reading
    // with the design's op-amps lies far from the ideal one.
    (
        "ultrasonic-bandpass-on-slow-opamps",
        r#"[filter]
kind = "bandpass"
family = "chebyshev"
order = 3
passband_edge_hz = [36000.0, 44000.0]
passband_ripple_db = 0.5

[terminations]
source_ohm = 1000.0
load_ohm = 1000.0

[opamp]
model = "single_pole"
gbw_hz = 2e6
dc_gain_db = 90.0
swing_v = 3.0
slew_v_per_s = 1e6
"#,
    ),
    (
        "q20-bandpass",
        r#"[filter]
kind = "bandpass"
family = "chebyshev"
order = 3
passband_edge_hz = [975.0, 1025.0]
passband_ripple_db = 0.5

[terminations]
source_ohm = 10000.0
load_ohm = 10000.0
"#,
    ),
    (
        "hum-bandstop",
        r#"[filter]
kind = "bandstop"
family = "chebyshev"
order = 3
passband_edge_hz = [50.0, 72.0]
stopband_edge_hz = [58.0, 62.0]
passband_ripple_db = 0.5
stopband_attenuation_db = 30.0

[terminations]
source_ohm = 4700.0
load_ohm = 4700.0
"#,
    ),
];

/// Every shipped example and the band filters, designed with their build.
fn designs() -> Vec<(String, Design, ActiveDesign)> {
    let mut out = Vec::new();
    for entry in std::fs::read_dir("examples").unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "toml") {
            let d = design(&Spec::load(&path).unwrap()).unwrap();
            let a = d.active().unwrap();
            out.push((path.display().to_string(), d, a));
        }
    }
    for (name, text) in BAND_FILTERS {
        let dir = scratch(&format!("tuning-{name}"));
        let d = design(&Spec::load(Path::new(&spec_in(&dir, text))).unwrap()).unwrap();
        let a = d.active().unwrap();
        out.push((name.to_string(), d, a));
    }
    out.sort_by(|a, b| a.0.cmp(&b.0));
    out
}

/// How far a reading may land from the step's frequency, relative: the
/// issue's 0.1 % of frequency.
const READING_FREQUENCY: f64 = 1e-3;

/// Half the span swept around each step's frequency, relative: wide
/// enough to hold any reading that could pass, narrow enough for a fine
/// grid.
const SPAN: f64 = 0.02;

/// Points per decade of that sweep: 20,000 puts a point every 0.0115 %,
/// a ninth of the allowed distance.
const PER_DECADE: usize = 20_000;

/// Where a swept reading falls: the frequency of the deepest minimum of
/// |V|, or where the phase of V crosses zero (interpolated between the
/// two points around it, the crossing nearest the middle).
fn reading_at(reading: Reading, freqs: &[f64], v: &[num_complex::Complex64]) -> Option<f64> {
    match reading {
        Reading::DeepestMinimum => freqs
            .iter()
            .zip(v)
            .min_by(|a, b| a.1.norm().total_cmp(&b.1.norm()))
            .map(|(&f, _)| f),
        Reading::InPhase => {
            let middle = freqs[freqs.len() / 2];
            (1..freqs.len())
                .filter_map(|i| {
                    let (p0, p1) = (v[i - 1].arg(), v[i].arg());
                    // A crossing of zero, not the wrap at +-pi.
                    (p0.signum() != p1.signum() && (p0 - p1).abs() < 1.0)
                        .then(|| freqs[i - 1] + (freqs[i] - freqs[i - 1]) * p0 / (p0 - p1))
                })
                .min_by(|a, b| (a - middle).abs().total_cmp(&(b - middle).abs()))
        }
    }
}

/// Each step of every design's procedure, read on the soldered deck set
/// up as the step says (arms shorted by clip leads, arms out of circuit),
/// every trimmer at its nominal setting: with ideal op-amps ngspice (the
/// reference) puts the reading at the step's ideal frequency, and with
/// the build's own op-amp model at the frequency the procedure tells the
/// bench, each within 0.1 %; nocoil's own solver on the same network
/// agrees with ngspice.
#[test]
fn every_reading_is_where_the_procedure_says_in_ngspice() {
    use nocoil::export::spice::{deck, AcSweep};
    let mut checked = 0;
    for (name, _, a) in designs() {
        let board = soldered(&a.on_parts.netlist, &a.on_parts.trims).unwrap();
        for (k, step) in a.on_parts.procedure.iter().enumerate() {
            let set_up = step.configure(&board).unwrap();
            for (ideal, frequency_hz) in
                [(true, step.ideal_frequency_hz), (false, step.frequency_hz)]
            {
                let what = format!(
                    "{name}, step {} ({}, {} op-amps)",
                    k + 1,
                    step.trimmer,
                    if ideal { "ideal" } else { "the build's" }
                );
                let net = match ideal {
                    true => with_model(&set_up, OpAmpModel::Ideal),
                    false => set_up.clone(),
                };
                let sweep = AcSweep {
                    points_per_decade: PER_DECADE,
                    start_hz: frequency_hz * (1.0 - SPAN),
                    stop_hz: frequency_hz * (1.0 + SPAN),
                };
                let plot = crate::util::ngspice_plot(&deck(&net, &sweep).unwrap(), "AC");
                let freqs: Vec<f64> = plot.vector("frequency").iter().map(|f| f.re).collect();
                let v = plot.vector(&format!("v({})", step.node)).to_vec();
                let spice = reading_at(step.reading, &freqs, &v)
                    .unwrap_or_else(|| panic!("{what}: ngspice shows no {}", step.reading));
                assert!(
                    (spice / frequency_hz - 1.0).abs() <= READING_FREQUENCY,
                    "{what}: ngspice reads {} at {spice} Hz, the procedure says {frequency_hz} Hz",
                    step.reading,
                );
                let own = response(&net, &freqs).unwrap();
                let ours = reading_at(step.reading, &freqs, &own.h).unwrap();
                assert!(
                    (ours / spice - 1.0).abs() <= READING_FREQUENCY,
                    "{what}: nocoil reads {ours} Hz, ngspice {spice} Hz"
                );
                checked += 1;
            }
        }
    }
    // The examples with resonators (bird survey 4, mains 4, vibration 3)
    // and the band filters (3 each), each read twice.
    assert_eq!(checked, 2 * 20);
}

/// Boards of the yield comparison with untrimmed parts: the same seed
/// draws the same fraction of each part's tolerance for both builds
/// (common random numbers), so the comparison is far tighter than either
/// yield's own interval. 4,000: on 400 the echo Bessel's delay-bound
/// yield read 17 boards preset against 19 untrimmed, on 4,000 200 against
/// 193 (its nominal delay spread 356 ns preset, 444 ns untrimmed): two
/// boards of 400 are the draw's, not the presets'.
const COMPARED_BOARDS: usize = 4000;

/// The procedure never leaves a board worse than untrimmed: on every
/// example and band filter, the yield of the build on parts as tuned
/// (and preset) is at least that of the same boards with every trim a
/// fixed resistor on its nearest series value; and where the procedure
/// has steps, the nominal board keeps the specification by a wider
/// margin than untrimmed. (A design of presets only, whose converters
/// have no resonance to read, restores each converter's value, which is
/// what the yield rewards: the table demo's nominal margin is 0.037 dB
/// against 0.054 dB untrimmed, its yield 51.75 % against 48.5 % on
/// these boards.)
#[test]
fn tuning_never_leaves_the_board_worse_than_untrimmed() {
    let mut gained = 0;
    for (name, d, a) in designs() {
        let mut untrimmed = a.clone();
        untrimmed.on_parts.netlist = a.on_parts.untrimmed.clone();
        untrimmed.on_parts.trims.clear();
        untrimmed.on_parts.procedure.clear();
        let yield_of = |x: &ActiveDesign| {
            d.monte_carlo(x, true, COMPARED_BOARDS, 1, None)
                .unwrap()
                .yield_fraction
        };
        let (tuned, before) = (yield_of(&a), yield_of(&untrimmed));
        let margin = |n| d.verdict(n).unwrap().margin_db;
        let (m_tuned, m_before) = (margin(&a.on_parts.netlist), margin(&a.on_parts.untrimmed));
        println!(
            "{name}: yield untrimmed {:.2} %, tuned {:.2} %; margin untrimmed {m_before:.4} dB, tuned {m_tuned:.4} dB",
            100.0 * before,
            100.0 * tuned
        );
        assert!(tuned >= before, "{name}: yield {tuned}, untrimmed {before}");
        if !a.on_parts.procedure.is_empty() {
            assert!(
                m_tuned > m_before,
                "{name}: margin {m_tuned}, untrimmed {m_before}"
            );
            gained += 1;
        }
    }
    assert_eq!(gained, 6);
}

/// The bird-survey demo without op-amp spread: an independent Monte Carlo
/// in ngspice can vary every part with `alter`, but not a subcircuit's
/// gain-bandwidth.
fn survey_without_gbw_spread() -> (Design, ActiveDesign) {
    let path = Path::new("examples/birdsong-bandpass.toml");
    let text = std::fs::read_to_string(path).unwrap() + "\n[montecarlo]\ngbw_spread = 0\n";
    let d = design(&Spec::from_toml(path, &text).unwrap()).unwrap();
    let a = d.active().unwrap();
    (d, a)
}

/// A deck of `net` for ngspice's control language: the netlist as
/// exported, its own analyses dropped, `control` run instead.
fn control_deck(net: &nocoil::circuit::Netlist, control: &str) -> String {
    use nocoil::export::spice::{deck, AcSweep};
    let sweep = AcSweep {
        points_per_decade: 1,
        start_hz: 1.0,
        stop_hz: 10.0,
    };
    let text = deck(net, &sweep).unwrap();
    let kept: Vec<&str> = text
        .lines()
        .filter(|l| {
            let l = l.to_ascii_lowercase();
            !(l.starts_with(".ac") || l.starts_with(".print") || l.trim() == ".end")
        })
        .collect();
    format!(
        "{}\n.control\n{control}quit\n.endc\n.end\n",
        kept.join("\n")
    )
}

/// Runs ngspice on `deck`, whose control block writes `file` (named
/// `DATA` in it) with `wrdata`, and returns its rows of numbers.
fn ngspice_rows(deck: &str) -> Vec<Vec<f64>> {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("data.txt");
    let deck = deck.replace("DATA", data.to_str().unwrap());
    let path = dir.path().join("deck.cir");
    std::fs::write(&path, &deck).unwrap();
    let out = std::process::Command::new("ngspice")
        .arg("-b")
        .arg(&path)
        .output()
        .expect("ngspice runs (Debian package ngspice)");
    let text = std::fs::read_to_string(&data).unwrap_or_else(|_| {
        panic!(
            "ngspice wrote no data\n{}\n{}",
            String::from_utf8_lossy(&out.stdout),
            String::from_utf8_lossy(&out.stderr)
        )
    });
    text.lines()
        .map(|l| l.split_whitespace().map(|x| x.parse().unwrap()).collect())
        .filter(|r: &Vec<f64>| !r.is_empty())
        .collect()
}

/// Boards ngspice draws for the yield check: enough that the binomial
/// interval (about +-6 % at 99 % for a yield near 50 %) tells a wrong
/// draw or a wrong trimmer model, few enough for CI (about 0.6 s).
const NGSPICE_BOARDS: usize = 400;

/// Boards nocoil draws for the same check (its interval is half as wide).
const NOCOIL_BOARDS: usize = 2000;

/// Points per decade of the ngspice sweeps, interpolated (linear in dB
/// over log frequency) onto nocoil's Monte Carlo grid and its
/// refinements: at 400 the interpolation moves the bird-survey response
/// by under 1e-4 dB between points, far below what decides a board.
const NGSPICE_PER_DECADE: usize = 400;

/// Points of an ngspice linear sweep across each limit narrower than an
/// octave, where nocoil judges a board at its resonances: 1,000 put 0.01
/// Hz between points across the mains notch's 45 to 55 Hz stopband, where
/// a drawn board's peak of pole Q 734 is 0.07 Hz wide.
const NGSPICE_NARROW_POINTS: usize = 1000;

/// The 99 % two-sided normal quantile (common practice).
pub const Z99: f64 = 2.576;

/// The yield before tuning against an independent Monte Carlo in ngspice:
/// the soldered deck of the bird-survey demo, every resistor and
/// capacitor but the trimmers drawn uniformly within its tolerance by
/// ngspice's own generator (`sunif`) and set with `alter`, the trimmers
/// left at their settings; each board's response judged by the same
/// specification. The two yields agree within the 99 % two-proportion
/// interval (common practice).
#[test]
fn yield_before_tuning_agrees_with_a_monte_carlo_in_ngspice() {
    let (d, a) = survey_without_gbw_spread();
    let z = ngspice_yield_z(&d, &a);
    assert!(z.abs() < Z99, "z = {z}");
}

/// The two-proportion z of nocoil's yield before tuning of `a` (a build
/// without op-amp spread: ngspice cannot vary a subcircuit's
/// gain-bandwidth with `alter`) against ngspice's own Monte Carlo of its
/// soldered deck: every resistor and capacitor but the trimmers drawn
/// uniformly within its tolerance by `sunif`, the trimmers left at their
/// settings, each board judged by the same limits.
pub fn ngspice_yield_z(d: &Design, a: &ActiveDesign) -> f64 {
    assert_eq!(
        d.spec.montecarlo.gbw_spread, 0.0,
        "test bug: ngspice cannot vary the GBW"
    );
    let board = soldered(&a.on_parts.netlist, &a.on_parts.trims).unwrap();
    let parts = &d.spec.parts;
    let mut control = String::from("set rndseed=11\nset appendwrite\nset wr_singlescale\n");
    let (lo, hi) = d.view_hz();
    control.push_str(&format!("repeat {NGSPICE_BOARDS}\n"));
    for e in &board.elements {
        let tolerance = match e.kind() {
            nocoil::circuit::ElementKind::Resistor if !e.name().starts_with("RV") => {
                parts.resistor_tolerance
            }
            nocoil::circuit::ElementKind::Capacitor => parts.capacitor_tolerance,
            _ => continue,
        };
        control.push_str(&format!(
            "let x = {:e}*(1+{tolerance:e}*sunif(0))\nalter {} = $&x\n",
            e.value().unwrap(),
            e.name()
        ));
    }
    control.push_str(&format!(
        "ac dec {NGSPICE_PER_DECADE} {lo:e} {hi:e}\nwrdata DATA vdb(out)\n"
    ));
    let narrow: Vec<[f64; 2]> = d
        .yield_limits()
        .iter()
        .filter(|l| l.to_hz > l.from_hz && l.to_hz < 2.0 * l.from_hz)
        .map(|l| [l.from_hz, l.to_hz])
        .collect();
    for [from, to] in &narrow {
        control.push_str(&format!(
            "ac lin {NGSPICE_NARROW_POINTS} {from:e} {to:e}\nwrdata DATA vdb(out)\n"
        ));
    }
    control.push_str("destroy all\nend\n");
    let rows = ngspice_rows(&control_deck(&board, &control));
    let per_board = rows.len() / NGSPICE_BOARDS;
    assert_eq!(per_board * NGSPICE_BOARDS, rows.len());
    let grid = d.monte_carlo_grid().unwrap();
    let mask = nocoil::analysis::Mask::new(d.yield_limits()).unwrap();
    let mut met = 0;
    // Each board judged as nocoil judges its own: on the Monte Carlo grid,
    // refined around its ripple peaks, ngspice's response read at any
    // frequency by interpolation (linear in dB over log frequency); and at
    // every point of its narrow limits' sweeps, where nocoil judges a board
    // at its resonances.
    for b in rows.chunks(per_board) {
        let dense: Vec<f64> = b[per_board - narrow.len() * NGSPICE_NARROW_POINTS..]
            .iter()
            .map(|r| r[0])
            .collect();
        let mut b = b.to_vec();
        b.sort_by(|x, y| x[0].total_cmp(&y[0]));
        let at = |freqs: &[f64]| -> Vec<f64> {
            freqs
                .iter()
                .map(|&f| {
                    let i = b.partition_point(|r| r[0] < f).clamp(1, b.len() - 1);
                    let (f0, f1) = (b[i - 1][0].ln(), b[i][0].ln());
                    let t = (f.ln() - f0) / (f1 - f0);
                    b[i - 1][1] + t * (b[i][1] - b[i - 1][1])
                })
                .collect()
        };
        let v = mask
            .refined_verdict(
                &grid,
                &at(&grid),
                &dense,
                nocoil::analysis::REFINE_BAND_DB,
                |z| Ok::<_, nocoil::analysis::AnalysisError>(at(z)),
            )
            .unwrap();
        met += usize::from(v.meets);
    }
    // nocoil's boards judged as ngspice's are, by the magnitude mask
    // alone: an AC analysis cannot see that a board is unstable, which
    // nocoil's yield counts as a failure (0.7 % of the mains notch's
    // boards, measured). Each at its resonances too, as the design judges.
    let judge = |n: &nocoil::circuit::Netlist| nocoil::analysis::BoardRoots {
        stable: true,
        roots_rad_s: nocoil::active::natural_frequencies(n).unwrap(),
    };
    let parts_net = &a.on_parts.netlist;
    let rules = d.tolerance_rules().unwrap();
    let tuning = a.on_parts.tuning(false);
    let setup = nocoil::analysis::MonteCarlo {
        out: parts_net.require_node("out").unwrap(),
        inp: parts_net.require_node("in").unwrap(),
        freqs_hz: &grid,
        rules: &rules,
        mask: &mask,
        trials: NOCOIL_BOARDS,
        seed: 3,
        worst: 1,
        roots: Some(&judge),
        delay: None,
        tuning: Some(&tuning),
    };
    let system = nocoil::circuit::AcSystem::new(parts_net).unwrap();
    let ours = nocoil::analysis::monte_carlo(&system, &setup, None).unwrap();
    let (p1, p2) = (ours.yield_fraction, met as f64 / NGSPICE_BOARDS as f64);
    let pooled = (ours.passed + met) as f64 / (NOCOIL_BOARDS + NGSPICE_BOARDS) as f64;
    let sigma =
        (pooled * (1.0 - pooled) * (1.0 / NOCOIL_BOARDS as f64 + 1.0 / NGSPICE_BOARDS as f64))
            .sqrt();
    let z = match sigma > 0.0 {
        true => (p1 - p2) / sigma,
        // Every board of both runs met it, or none did: they agree.
        false => 0.0,
    };
    println!(
        "{}: yield before tuning: nocoil {:.2} % ({} of {NOCOIL_BOARDS}), ngspice {:.2} % ({met} of {NGSPICE_BOARDS}), z = {z:.2}",
        d.spec.file.display(),
        100.0 * p1,
        ours.passed,
        100.0 * p2,
    );
    z
}

/// Boards drawn and tuned twice for the after-tuning check: by nocoil's
/// Monte Carlo tuning and by the procedure's steps carried out in ngspice.
const RETUNED_BOARDS: usize = 3;

/// How far nocoil's tuning may set a trim from the procedure carried out
/// in ngspice, relative, beyond one trimmer step: the bench reads with
/// the op-amps, nocoil's rule is their ideal relation. The op-amps move
/// the bird survey's readings by 0.2 % to 0.3 % (3.9884 kHz against
/// 4 kHz), the same on every board but for the draws' share of it; on
/// three boards the trims agreed within 0.040 %, so 0.05 %.
const OPAMP_SHARE: f64 = 5e-4;

/// How far the two tuned boards' responses may differ over the passband,
/// dB: a trim 0.09 % off (one step and the op-amps' share) moves this
/// bandpass by about 0.01 dB; measured 0.008 dB at most on three boards.
/// Far below the 0.24 dB the nominal board keeps to the specification.
const TUNED_RESPONSES_DB: f64 = 0.02;

/// Settings of each scan of a trimmer in ngspice; two scans (the whole
/// trimmer, then the interval around the reading) resolve a setting to
/// 1/40,000 of the trimmer, 40 times finer than the stated resolution.
const SCAN_SETTINGS: usize = 201;

/// Where a scan of settings shows `reading`: the setting of the smallest
/// |V|, or the two settings between which the phase changes sign (the
/// change nearest `near`); returns the interval to scan next.
fn bracket(
    reading: Reading,
    settings: &[f64],
    v: &[num_complex::Complex64],
    near: f64,
) -> (f64, f64) {
    let n = settings.len();
    let i = match reading {
        Reading::DeepestMinimum => (0..n)
            .min_by(|&a, &b| v[a].norm().total_cmp(&v[b].norm()))
            .unwrap(),
        Reading::InPhase => (1..n)
            .filter(|&i| {
                v[i - 1].arg().signum() != v[i].arg().signum()
                    && (v[i - 1].arg() - v[i].arg()).abs() < 1.0
            })
            .min_by(|&a, &b| {
                (settings[a] - near)
                    .abs()
                    .total_cmp(&(settings[b] - near).abs())
            })
            .expect("the phase crosses zero within the trimmer's range"),
    };
    (settings[i.saturating_sub(1)], settings[(i + 1).min(n - 1)])
}

/// The yield after tuning rests on nocoil's Monte Carlo tuning each board
/// as the procedure would: a few boards of the bird-survey demo, drawn
/// here (uniform within the design's tolerances), are tuned by nocoil's
/// Monte Carlo rule and, independently, by carrying out each step of the
/// printed procedure in ngspice (the board set up as the step says, the
/// generator at the step's frequency, the trimmer scanned for the
/// reading, earlier steps' trimmers left where they were set). Each
/// trimmer lands on the same setting within the stated resolution plus
/// the op-amps' share (see below), and the two tuned boards' responses
/// agree over the passband.
#[test]
fn monte_carlo_tuning_is_the_procedure_carried_out_in_ngspice() {
    use nocoil::circuit::ElementKind;
    use rand_chacha::rand_core::{Rng, SeedableRng};
    let (d, a) = survey_without_gbw_spread();
    let parts = &d.spec.parts;
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
    let nominal = &a.on_parts.netlist;
    for b in 0..RETUNED_BOARDS {
        // The board's draws, one factor per resistor and capacitor.
        let factor: Vec<f64> = nominal
            .elements
            .iter()
            .map(|e| {
                let tolerance = match e.kind() {
                    ElementKind::Resistor => parts.resistor_tolerance,
                    ElementKind::Capacitor => parts.capacitor_tolerance,
                    _ => 0.0,
                };
                let u = (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
                1.0 + tolerance * (2.0 * u - 1.0)
            })
            .collect();
        let mut drawn = nominal.clone();
        for (i, &f) in factor.iter().enumerate() {
            if let Some(v) = nominal.elements[i].value() {
                if !matches!(nominal.elements[i].kind(), ElementKind::VoltageSource) {
                    drawn.set_value(i, v * f).unwrap();
                }
            }
        }
        let mut trims = a.on_parts.trims.clone();
        for t in &mut trims {
            t.fixed_ohm *= factor[t.index];
            drawn
                .set_value(t.index, t.fixed_ohm + t.setting_ohm)
                .unwrap();
        }
        // nocoil's tuning of this board.
        let mut system = nocoil::circuit::AcSystem::new(&drawn).unwrap();
        a.on_parts.tuning(true).apply(&mut system).unwrap();
        let ours = system.netlist().clone();
        // The procedure, step by step, in ngspice.
        for step in &a.on_parts.procedure {
            let t = trims
                .iter()
                .position(|t| nocoil::realize::trimmer_designator(&t.element) == step.trimmer)
                .unwrap();
            let set_up = step.configure(&soldered(&drawn, &trims).unwrap()).unwrap();
            let (mut lo, mut hi) = (0.0, trims[t].pot_ohm);
            for _ in 0..2 {
                let settings: Vec<f64> = (0..SCAN_SETTINGS)
                    .map(|k| lo + (hi - lo) * k as f64 / (SCAN_SETTINGS - 1) as f64)
                    .collect();
                let mut control = String::from("set appendwrite\nset wr_singlescale\n");
                for s in &settings {
                    control.push_str(&format!(
                        "alter {} = {:e}\nac lin 1 {f:e} {f:e}\nwrdata DATA real(v({n})) imag(v({n}))\ndestroy all\n",
                        step.trimmer,
                        s.max(1e-6),
                        f = step.frequency_hz,
                        n = step.node
                    ));
                }
                let rows = ngspice_rows(&control_deck(&set_up, &control));
                let v: Vec<num_complex::Complex64> = rows
                    .iter()
                    .map(|r| num_complex::Complex64::new(r[1], r[2]))
                    .collect();
                (lo, hi) = bracket(step.reading, &settings, &v, trims[t].setting_ohm);
            }
            trims[t].setting_ohm = (lo + hi) / 2.0;
            let theirs = trims[t].fixed_ohm + trims[t].setting_ohm;
            let mine = ours.elements[trims[t].index].value().unwrap();
            println!(
                "board {b}, {}: ngspice {theirs:.4} ohm, nocoil {mine:.4} ohm ({:+.4} %)",
                step.trimmer,
                100.0 * (mine / theirs - 1.0)
            );
            let step_ohm = trims[t].pot_ohm * nocoil::realize::TRIMMER_RESOLUTION;
            assert!(
                (mine - theirs).abs() <= step_ohm + OPAMP_SHARE * theirs,
                "board {b}, {}: nocoil {mine} ohm, ngspice {theirs} ohm",
                step.trimmer
            );
        }
        // The two tuned boards over the passband.
        let mut by_spice = drawn.clone();
        for t in &trims {
            by_spice
                .set_value(t.index, t.fixed_ohm + t.setting_ohm)
                .unwrap();
        }
        let grid = nocoil::circuit::band_grid(&d.passbands_hz(), 200).unwrap();
        let h1 = response(&by_spice, &grid).unwrap().h;
        let h2 = response(&ours, &grid).unwrap().h;
        let worst = h1
            .iter()
            .zip(&h2)
            .map(|(x, y)| (20.0 * (x / y).norm().log10()).abs())
            .fold(0.0, f64::max);
        println!("board {b}: tuned responses differ by {worst:.5} dB at most in the passband");
        assert!(worst <= TUNED_RESPONSES_DB, "board {b}: {worst} dB");
    }
}

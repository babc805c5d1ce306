//! Tests of the finite gain-bandwidth compensation: each converter's
//! value made exact at the balance frequency, the refinement that runs by
//! itself when the op-amps spend more than a tenth of the ripple, the
//! gain-bandwidth a build beyond the ripple states, and the compensated
//! decks in ngspice.

use std::path::Path;
use std::time::Instant;

use num_complex::Complex64;

use crate::util::{assert_close_response, ngspice_ac};
use nocoil::active::{realize, realized_value, ActiveBuild, Handles, Note, Refine};
use nocoil::circuit::{AcSystem, Netlist};
use nocoil::design::{design, Design};
use nocoil::export::spice::{deck, AcSweep};
use nocoil::spec::Spec;

/// A 7th-order elliptic lowpass at 40 kHz, 0.1 dB / 60 dB, 1 kohm
/// terminations, on 1 MHz single-pole op-amps (A0 100 dB): the balanced
/// build deviates 11.5 dB from the passive ideal.
const ELLIPTIC_40K: &str = r#"
[filter]
kind = "lowpass"
family = "elliptic"
order = 7
passband_edge_hz = 40000.0
passband_ripple_db = 0.1
stopband_attenuation_db = 60.0
[terminations]
source_ohm = 1000.0
load_ohm = 1000.0
[opamp]
model = "single_pole"
gbw_hz = 1e6
dc_gain_db = 100.0
"#;

/// A 7th-order 0.5 dB Chebyshev lowpass at 150 kHz, 1 kohm terminations,
/// on 10 MHz single-pole op-amps (A0 100 dB).
const CHEBYSHEV_150K: &str = r#"
[filter]
kind = "lowpass"
family = "chebyshev"
order = 7
passband_edge_hz = 150000.0
passband_ripple_db = 0.5
[terminations]
source_ohm = 1000.0
load_ohm = 1000.0
[opamp]
model = "single_pole"
gbw_hz = 10e6
dc_gain_db = 100.0
"#;

/// The project's end-to-end budget (as in tests/active.rs): a deck must
/// agree with ngspice to 0.01 dB wherever the response is above
/// [`DECK_FLOOR_DB`].
const DECK_TOL_DB: f64 = 0.01;
/// The same 1.2e-3 relative error as 0.01 dB, as a phase: 0.066 degree.
const DECK_TOL_DEG: f64 = 0.066;
/// Below this the comparison stops (the brief of the compensation: -60
/// dB, where ngspice's printed digits and the stopband zeros leave
/// relative agreement meaningless).
const DECK_FLOOR_DB: f64 = -60.0;

/// The realized value after compensation against the value the chain
/// holds with ideal op-amps. The converter's port current is exactly
/// proportional to 1/Z1 whatever the op-amps (src/active/compensate.rs),
/// so one scaling of Z1 is exact but for rounding: two dense solves of a
/// system of about a dozen unknowns (relative error about the condition
/// number times 2.2e-16, the condition number of these small chains well
/// below 1e5) and a product of five values; 1e-9 leaves a factor of 50 to
/// that.
const COMPENSATED_TOL: f64 = 1e-9;

fn load(text: &str) -> Design {
    let spec = Spec::from_toml(Path::new("compensation.toml"), text).unwrap();
    design(&spec).unwrap()
}

fn db(h: Complex64) -> f64 {
    20.0 * h.norm().log10()
}

/// The refinement note of a build.
fn refined_note(b: &ActiveBuild) -> (f64, f64, f64, f64, f64) {
    b.notes
        .iter()
        .find_map(|n| match *n {
            Note::Refined {
                balance_hz,
                correction,
                balanced_deviation_db,
                compensated_deviation_db,
                refined_deviation_db,
            } => Some((
                balance_hz,
                correction,
                balanced_deviation_db,
                compensated_deviation_db,
                refined_deviation_db,
            )),
            _ => None,
        })
        .expect("the build was refined")
}

/// Each converter of the compensated build realizes, at the balance
/// frequency and with its op-amp model, its target value (the passive
/// ideal's element through the GIC relation, Antoniou 1969, Proc. IEE
/// 116; common practice) times the trim correction the simplex chose,
/// within [`COMPENSATED_TOL`]; without compensation the same converters
/// err by percents (so the check is not vacuous).
#[test]
fn compensated_converters_realize_their_value_at_the_balance_frequency() {
    for text in [ELLIPTIC_40K, CHEBYSHEV_150K] {
        let d = load(text);
        let opts = d.active_options();
        let b = realize(&d.passive, &opts).unwrap();
        let (balance_hz, correction, ..) = refined_note(&b);
        let mut plain = opts.clone();
        plain.optimize = Refine::Never;
        let balanced = realize(&d.passive, &plain).unwrap();
        for (stage, plain_stage) in b.stages.iter().zip(&balanced.stages) {
            let Handles::Converter(_) = stage.handles else {
                continue;
            };
            let got = realized_value(&b.netlist, stage, opts.opamp, balance_hz)
                .unwrap()
                .unwrap();
            let error = got / (stage.value * correction) - 1.0;
            assert!(
                error.abs() < COMPENSATED_TOL,
                "{:?}: realized {got:e}, target {:e} times {correction}: error {error:e}",
                stage.replaces,
                stage.value
            );
            let before =
                realized_value(&balanced.netlist, plain_stage, opts.opamp, opts.balance_hz)
                    .unwrap()
                    .unwrap();
            let plain_error = before / plain_stage.value - 1.0;
            assert!(plain_error.abs() > 0.01, "{plain_error:e}");
            println!(
                "{:?}: balanced error {plain_error:+.4e}, compensated {error:+.2e}",
                stage.replaces
            );
        }
    }
}

/// Both high-frequency designs, left to refine by themselves, end within
/// the specification's ripple of the passive ideal (itself checked
/// against scipy in tests/design.rs) or state the gain-bandwidth that
/// would; a build at that gain-bandwidth is then within the ripple.
#[test]
fn fast_designs_meet_the_ripple_or_state_the_gbw_that_would() {
    for (name, text) in [
        ("40 kHz elliptic, 1 MHz", ELLIPTIC_40K),
        ("150 kHz Chebyshev, 10 MHz", CHEBYSHEV_150K),
    ] {
        let d = load(text);
        let ripple = d.passband_ripple_db();
        let opts = d.active_options();
        let start = Instant::now();
        let b = realize(&d.passive, &opts).unwrap();
        let elapsed = start.elapsed();
        let (_, _, balanced, compensated, refined) = refined_note(&b);
        let deviation = b.passband_deviation_db.unwrap();
        println!(
            "{name}: {balanced:.4} dB balanced, {compensated:.4} dB compensated, {refined:.4} dB refined, {elapsed:.2?}"
        );
        let required = b.notes.iter().find_map(|n| match *n {
            Note::BeyondRipple {
                required_gbw_hz, ..
            } => Some(required_gbw_hz),
            _ => None,
        });
        match required {
            None => assert!(deviation <= ripple, "{name}: {deviation} dB"),
            Some(required) => {
                assert!(deviation > ripple, "{name}: {deviation} dB");
                let required = required.expect("the search found a GBW");
                let mut faster = opts.clone();
                faster.opamp = opts.opamp.with_gbw(required);
                let at = realize(&d.passive, &faster).unwrap();
                let checked = at.passband_deviation_db.unwrap();
                println!("{name}: needs {required:.4e} Hz: {checked:.4} dB there");
                assert!(checked <= ripple, "{name}: {checked} dB at {required} Hz");
            }
        }
    }
}

/// The compensated builds' decks (export::spice::deck, the op-amps as
/// their single-pole subcircuits) run live in ngspice agree with nocoil's
/// own solver to [`DECK_TOL_DB`] wherever the response is above
/// [`DECK_FLOOR_DB`].
#[test]
fn compensated_decks_agree_with_ngspice() {
    for (text, (from_hz, to_hz)) in [(ELLIPTIC_40K, (1e3, 200e3)), (CHEBYSHEV_150K, (5e3, 1e6))] {
        let d = load(text);
        let b = realize(&d.passive, &d.active_options()).unwrap();
        refined_note(&b);
        check_deck(&b.netlist, (from_hz, to_hz));
    }
}

fn check_deck(netlist: &Netlist, (start_hz, stop_hz): (f64, f64)) {
    let sweep = AcSweep {
        points_per_decade: 40,
        start_hz,
        stop_hz,
    };
    let spice = ngspice_ac(&deck(netlist, &sweep).unwrap());
    let freqs: Vec<f64> = spice.iter().map(|p| p.0).collect();
    let mut system = AcSystem::new(netlist).unwrap();
    let (out, inp) = (
        netlist.node_index("out").unwrap(),
        netlist.node_index("in").unwrap(),
    );
    let ours = system.sweep(&freqs, out, inp).unwrap().h;
    let above: Vec<usize> = (0..freqs.len())
        .filter(|&k| db(ours[k]) > DECK_FLOOR_DB)
        .collect();
    let pick = |v: &[Complex64]| above.iter().map(|&k| v[k]).collect::<Vec<_>>();
    let theirs: Vec<Complex64> = spice.iter().map(|p| p.1).collect();
    let f: Vec<f64> = above.iter().map(|&k| freqs[k]).collect();
    assert_close_response(
        &f,
        &pick(&theirs),
        &pick(&ours),
        DECK_TOL_DB,
        DECK_TOL_DEG,
        &netlist.title,
    );
}

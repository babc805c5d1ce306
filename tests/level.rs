//! Tests of the impedance level as a design freedom (`[terminations]
//! level`), on four designs whose ladder capacitors lie above the default
//! capacitor range at the design file's terminations
//! (`tests/fixtures/level/`).
//!
//! References, named at each check:
//! - impedance scaling (common practice): every impedance times k (R and L
//!   times k, C divided by k) leaves every voltage ratio unchanged;
//! - ngspice, run live on the passive deck at the level chosen;
//! - IEC 60063 for the preferred values, through `nocoil::parts` (whose
//!   tables tests/parts.rs checks against the published departures).

use std::path::{Path, PathBuf};

use crate::util::ngspice_ac;
use nocoil::circuit::{log_grid, response, Element, Netlist};
use nocoil::design::{design, Design, DesignError};
use nocoil::export::spice::{deck, AcSweep};
use nocoil::parts::{ImpedanceLevel, PartsChoice, Series};
use nocoil::realize::{ladder_level, PartsSnapError};
use nocoil::spec::Spec;

/// The four designs: a 600 ohm Chebyshev highpass at 80 Hz, a
/// one-third-octave Butterworth bandpass at 1 kHz, a 50 Hz Butterworth
/// bandstop and a 100 Hz to 5 kHz Butterworth bandstop.
pub const LEVEL_DESIGNS: [&str; 4] = [
    "highpass-80hz.toml",
    "third-octave-1khz.toml",
    "notch-50hz.toml",
    "wide-bandstop.toml",
];

/// The design file `name` of the level fixtures.
pub fn level_design(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/fixtures/level")
        .join(name)
}

/// The text of the level fixture `name` with `level` written into its
/// `[terminations]` table and `extra` TOML appended.
pub fn level_text(name: &str, level: &str, extra: &str) -> String {
    let text = std::fs::read_to_string(level_design(name)).unwrap();
    assert!(text.contains("[terminations]\n"), "test bug: {name}");
    text.replace(
        "[terminations]\n",
        &format!("[terminations]\nlevel = \"{level}\"\n"),
    ) + extra
}

/// The design of fixture `name` at `level`, with `extra` TOML appended.
fn designed(name: &str, level: &str, extra: &str) -> Result<Design, DesignError> {
    let spec = Spec::from_toml(&level_design(name), &level_text(name, level, extra))?;
    design(&spec)
}

/// How far the free level may move the passive ideal's gain, dB, where
/// it lies above [`FLOOR_DB`]. Scaling every impedance by k leaves every
/// voltage ratio unchanged (common practice); what remains is the
/// solver's rounding (measured on the four designs: at most 3e-14 dB,
/// and 2e-12 dB on the skirts of the 50 Hz notch near -80 dB).
const SCALING_TOL_DB: f64 = 1e-9;

/// The same for the complex transfer everywhere, notches included, where
/// a gain in dB has no bound (an exact zero is -inf dB): absolute, on a
/// transfer of at most 1, the relative size of SCALING_TOL_DB (1e-9 dB is
/// 1.2e-10). Measured: 5e-15 within a decade of the edges, 1.6e-12 at
/// 1 MHz on the 80 Hz highpass, whose view now reaches a tenth of the
/// op-amps' GBW, four decades up, where the solve's conditioning has grown
/// as (f / f_edge)^2.
const SCALING_TOL_H: f64 = 1.2e-10;

/// The project's budget for an exported deck against nocoil's solver.
const NGSPICE_TOL_DB: f64 = 0.01;

/// Below this ngspice's gain (and any measurement) is noise.
const FLOOR_DB: f64 = -80.0;

/// Every capacitor of `netlist` and its value, farad.
fn capacitors(netlist: &Netlist) -> Vec<(String, f64)> {
    netlist
        .elements
        .iter()
        .filter_map(|e| match e {
            Element::Capacitor { name, farad, .. } => Some((name.clone(), *farad)),
            _ => None,
        })
        .collect()
}

/// Every resistor of `netlist` and its value, ohm.
fn resistors(netlist: &Netlist) -> Vec<(String, f64)> {
    netlist
        .elements
        .iter()
        .filter_map(|e| match e {
            Element::Resistor { name, ohm, .. } => Some((name.clone(), *ohm)),
            _ => None,
        })
        .collect()
}

/// With a free level each design builds with every capacitor in the
/// default range and every resistor in the resistor range, on the
/// passive ideal and on the active on parts build alike; the passive
/// ideal's gain is the fixed level's (impedance scaling, common
/// practice), and ngspice, run live on its deck, agrees.
#[test]
fn free_level_builds_each_design_in_range_with_the_same_response() {
    let choice = PartsChoice::default();
    let (c_low, c_high) = choice.capacitor_range_f;
    let (r_low, r_high) = choice.resistor_range_ohm;
    let mut report = Vec::new();
    for name in LEVEL_DESIGNS {
        // Without the automatic refinement: it moves the converters'
        // balance point, and with it their resistors, by what the op-amps
        // need (the 50 Hz notch: balanced 3.2 dB off, refined 0.035 dB
        // with the balance at 616 Hz and a 1.8 Mohm chain resistor); the
        // level chooses the ladder's own parts, which this checks.
        let unrefined = "[active]\noptimize = false\n";
        let fixed = designed(name, "fixed", unrefined).unwrap();
        let free = designed(name, "free", unrefined).unwrap();
        let level = &free.level;
        assert_eq!(level.asked, ImpedanceLevel::Free, "{name}");
        assert!(level.outside_default_range.is_empty(), "{name}: {level:?}");
        assert_eq!(level.fitting_factor, Some(level.factor), "{name}");
        let (rs, rl) = (free.spec.source_ohm, free.spec.load_ohm);
        assert_eq!(
            [level.source_ohm, level.load_ohm],
            [rs * level.factor, rl * level.factor],
            "{name}"
        );
        let active = free.active().unwrap();
        for netlist in [&free.passive, &active.on_parts.netlist] {
            for (c, farad) in capacitors(netlist) {
                assert!(
                    (c_low..=c_high).contains(&farad),
                    "{name}: {c} = {farad:e} F outside the default range"
                );
            }
            for (r, ohm) in resistors(netlist) {
                assert!(
                    (r_low..=r_high).contains(&ohm),
                    "{name}: {r} = {ohm} ohm outside the resistor range"
                );
            }
        }
        let (lo, hi) = free.view_hz();
        let grid = log_grid(lo, hi, 2001).unwrap();
        let before = response(&fixed.passive, &grid).unwrap();
        let after = response(&free.passive, &grid).unwrap();
        let (mut worst, mut worst_h): (f64, f64) = (0.0, 0.0);
        for (a, b) in before.h.iter().zip(&after.h) {
            worst_h = worst_h.max((a - b).norm());
            let (a, b) = (20.0 * a.norm().log10(), 20.0 * b.norm().log10());
            if a > FLOOR_DB {
                worst = worst.max((a - b).abs());
            }
        }
        assert!(worst <= SCALING_TOL_DB, "{name}: {worst:e} dB");
        assert!(worst_h <= SCALING_TOL_H, "{name}: |dH| = {worst_h:e}");
        let sweep = AcSweep {
            points_per_decade: 40,
            start_hz: lo,
            stop_hz: hi,
        };
        let spice = ngspice_ac(&deck(&free.passive, &sweep).unwrap());
        let freqs: Vec<f64> = spice.iter().map(|(f, _)| *f).collect();
        let ours = response(&fixed.passive, &freqs).unwrap().db();
        for ((f, h), o) in spice.iter().zip(&ours) {
            let theirs = 20.0 * h.norm().log10();
            if theirs > FLOOR_DB {
                assert!(
                    (theirs - o).abs() <= NGSPICE_TOL_DB,
                    "{name} at {f} Hz: ngspice {theirs:.6} dB at the free level, nocoil {o:.6} dB at the fixed one"
                );
            }
        }
        let span = |s: Option<[f64; 2]>| s.map(|[a, b]| format!("{a:.4e} .. {b:.4e} F"));
        report.push(format!(
            "{name:<24} x{:.6} -> source {:.2} ohm, load {:.2} ohm; capacitors {:?} -> {:?}; {worst:.1e} dB",
            level.factor,
            level.source_ohm,
            level.load_ohm,
            span(level.given_capacitors_f),
            span(level.capacitors_f)
        ));
    }
    println!("free levels:\n{}", report.join("\n"));
}

/// At the fixed level with the default range, each design builds, its
/// terminations as written, and warns of the capacitors outside the range
/// naming the level that fits: the free level's.
#[test]
fn fixed_level_with_the_default_range_warns_naming_the_level() {
    for name in LEVEL_DESIGNS {
        let fixed = designed(name, "fixed", "").unwrap();
        let free = designed(name, "free", "").unwrap();
        let level = &fixed.level;
        assert_eq!(level.factor, 1.0, "{name}");
        assert_eq!(
            [level.source_ohm, level.load_ohm],
            [fixed.spec.source_ohm, fixed.spec.load_ohm],
            "{name}"
        );
        assert!(
            !level.outside_default_range.is_empty()
                && level
                    .outside_default_range
                    .iter()
                    .all(|p| p.unit == "F" && p.value > p.high),
            "{name}: {level:?}"
        );
        assert_eq!(level.fitting_factor, Some(free.level.factor), "{name}");
        fixed.active().unwrap();
    }
}

/// With `parts.capacitor_range` written in the file, a capacitor outside
/// it at the fixed level is refused (bad input) naming the terminations
/// the free level takes, and the free level builds.
#[test]
fn a_given_range_refuses_the_fixed_level_naming_the_one_that_fits() {
    let given = "\n[parts]\ncapacitor_range = [100e-12, 1e-6]\n";
    for name in LEVEL_DESIGNS {
        let free = designed(name, "free", given).unwrap();
        let err = designed(name, "fixed", given).unwrap_err();
        assert!(err.is_bad_input(), "{name}: {err}");
        let DesignError::Parts {
            cause:
                PartsSnapError::LevelOutOfRange {
                    fitting_ohm,
                    beyond_resistor_range,
                    ..
                },
            ..
        } = err
        else {
            panic!("{name}: {err:?}");
        };
        assert_eq!(
            fitting_ohm,
            [free.level.source_ohm, free.level.load_ohm],
            "{name}"
        );
        assert!(!beyond_resistor_range, "{name}");
    }
}

/// A given range narrower than the ladder's capacitors' spread fits at
/// no level: the 50 Hz bandstop's capacitors spread over
/// Q^2 / (g1 g2) = 12.4 (Q = sqrt(45 x 55) / 10, Butterworth g1 = 1,
/// g2 = 2; common practice), wider than a one-decade range.
#[test]
fn no_level_fits_a_spread_wider_than_a_given_range() {
    let narrow = "\n[parts]\ncapacitor_range = [1e-9, 10e-9]\n";
    for level in ["fixed", "free"] {
        let err = designed("notch-50hz.toml", level, narrow).unwrap_err();
        assert!(err.is_bad_input(), "{err}");
        let DesignError::Parts {
            cause: PartsSnapError::NoLevelFits { spread, .. },
            ..
        } = err
        else {
            panic!("{err:?}");
        };
        let q2 = 45.0 * 55.0 / 100.0;
        assert!((spread - q2 / 2.0).abs() < 1e-9 * spread, "{spread}");
    }
}

/// A netlist of the contract with the given resistors and capacitors in
/// series from `in` (values only matter to the level choice).
fn ladder(ohms: &[f64], farads: &[f64]) -> (Netlist, Vec<usize>) {
    let mut n = Netlist::new("level");
    let (inp, out) = (n.node("in"), n.node("out"));
    n.add(Element::VoltageSource {
        name: "V1".to_string(),
        pos: inp,
        neg: 0,
        ac_volt: 1.0,
    })
    .unwrap();
    for (i, &ohm) in ohms.iter().enumerate() {
        n.add(Element::Resistor {
            name: format!("R{i}"),
            a: inp,
            b: out,
            ohm,
        })
        .unwrap();
    }
    for (i, &farad) in farads.iter().enumerate() {
        n.add(Element::Capacitor {
            name: format!("C{i}"),
            a: out,
            b: 0,
            farad,
        })
        .unwrap();
    }
    let kept = (1..n.elements.len()).collect();
    (n, kept)
}

/// The scan's rule on values whose answer is known: capacitors that are
/// E12 values (IEC 60063) times 1.03 in a wide range all land on E12
/// values at k = 1.03 and at every tenfold of it; the one nearest the
/// design file's level is taken. A capacitor 1.5 times above the range
/// lands on its upper end, 1 uF (an E12 value), at k = 1.5, the nearest
/// factor that fits.
#[test]
fn the_scan_takes_the_nearest_of_the_best_factors() {
    let choice = PartsChoice::default();
    let (n, kept) = ladder(&[1e3, 1e3], &[1.03 * 2.2e-9, 1.03 * 470e-9]);
    let level = ladder_level(&n, &kept, (1e3, 1e3), &choice, ImpedanceLevel::Free).unwrap();
    // The grid holds 19,200 points a decade: within half a step of 1.03.
    let half_step = 0.5 * (10f64.ln() / 19_200.0);
    assert!((level.factor / 1.03).ln().abs() <= half_step, "{level:?}");
    let (n, kept) = ladder(&[1e3], &[1.5e-6]);
    let level = ladder_level(&n, &kept, (1e3, 1e3), &choice, ImpedanceLevel::Free).unwrap();
    assert!((level.factor / 1.5 - 1.0).abs() < 1e-12, "{level:?}");
    let [low, high] = level.capacitors_f.unwrap();
    assert!((low - 1e-6).abs() < 1e-18 && low == high, "{level:?}");
    assert_eq!(Series::E12.nearest(high).unwrap(), 1e-6);
}

/// Terminations alone (no capacitor) keep the nearest level that fits
/// them: 50 ohm terminations rise to the 100 ohm the resistor range
/// starts at, and a fixed level warns of them.
#[test]
fn terminations_below_the_resistor_range_rise_to_it() {
    let choice = PartsChoice::default();
    let (n, kept) = ladder(&[50.0, 50.0], &[]);
    let free = ladder_level(&n, &kept, (50.0, 50.0), &choice, ImpedanceLevel::Free).unwrap();
    assert!((free.factor - 2.0).abs() < 1e-12, "{free:?}");
    assert!(free.outside_default_range.is_empty(), "{free:?}");
    let fixed = ladder_level(&n, &kept, (50.0, 50.0), &choice, ImpedanceLevel::Fixed).unwrap();
    assert_eq!(fixed.factor, 1.0);
    assert_eq!(fixed.outside_default_range.len(), 2, "{fixed:?}");
    assert_eq!(fixed.fitting_factor, Some(free.factor));
}

/// The FDNR image keeps no part at the ladder's level (every element is
/// an image scaled by tau, which follows the terminations: Bruton 1969,
/// IEEE Trans. Circuit Theory 16), so a free level leaves the elliptic
/// lowpass demo's terminations as written.
#[test]
fn an_fdnr_image_leaves_the_terminations_as_written() {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples/vibration-antialias.toml");
    let text = std::fs::read_to_string(&path)
        .unwrap()
        .replace("[terminations]\n", "[terminations]\nlevel = \"free\"\n");
    let d = design(&Spec::from_toml(&path, &text).unwrap()).unwrap();
    assert_eq!(d.level.ladder_parts, 0, "{:?}", d.level);
    assert_eq!(d.level.factor, 1.0);
    assert_eq!(d.level.source_ohm, d.spec.source_ohm);
}

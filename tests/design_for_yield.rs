//! Design for yield (`[yield]`): the search's promises (the order is not
//! raised for a target already met, the delivered design keeps the
//! margins it was synthesized with, every candidate is drawn on the same
//! boards, a tolerance change it suggests does reach the target), and the
//! delivered design's yield against an independent Monte Carlo in
//! ngspice. Bad input is in `cli.rs`.

use std::path::Path;

use nocoil::analysis::{Limit, Mask};
use nocoil::design::{design, design_for_yield, ActiveDesign, CandidateResult, Design, Margins};
use nocoil::spec::Spec;

use crate::tuning::{ngspice_yield_z, Z99};

/// A shipped example with its own `[yield]` table (the last) replaced by
/// `extra`.
fn example_with(file: &str, extra: &str) -> Spec {
    let path = Path::new("examples").join(file);
    let text = std::fs::read_to_string(&path).unwrap();
    let text = text.split("\n[yield]").next().unwrap().to_string() + extra;
    Spec::from_toml(&path, &text).unwrap()
}

/// The delivered design of a search, and its account.
fn searched(spec: &Spec) -> (Design, ActiveDesign) {
    let (d, a) = design_for_yield(spec, None).unwrap();
    assert!(
        d.yield_search.is_some(),
        "{}: no search account",
        spec.file.display()
    );
    (d, a)
}

/// The bird survey's design for the specification alone yields 66.6 %
/// after tuning (seed 1, measured): a target of 50 % is met at the
/// minimum order, which the search must not raise; the delivered
/// candidate is the widest-margin one at that order, and its yield is the
/// delivered design's own on the same boards.
#[test]
fn a_target_already_met_keeps_the_minimum_order() {
    let spec = example_with(
        "birdsong-bandpass.toml",
        "\n[yield]\ntarget = 0.5\nmax_extra_order = 1\n",
    );
    let (d, a) = searched(&spec);
    let s = d.yield_search.as_ref().unwrap();
    assert!(s.reached);
    assert_eq!(d.report().order, s.minimum_order);
    let chosen = s.chosen();
    assert_eq!(chosen.order, s.minimum_order);
    let margin_of = |r: &CandidateResult| match *r {
        CandidateResult::Measured {
            nominal_margin_db,
            yield_fraction,
            ..
        } if yield_fraction >= 0.5 => Some(nominal_margin_db),
        _ => None,
    };
    let widest = s
        .candidates
        .iter()
        .filter(|c| c.order == s.minimum_order)
        .filter_map(|c| margin_of(&c.result))
        .fold(f64::NEG_INFINITY, f64::max);
    assert_eq!(margin_of(&chosen.result), Some(widest));
    // Every candidate above the minimum order has more op-amps, so none
    // of them had boards drawn.
    for c in s.candidates.iter().filter(|c| c.order > s.minimum_order) {
        assert!(
            matches!(c.result, CandidateResult::Outnumbered { .. }),
            "order {}: {:?}",
            c.order,
            c.result
        );
    }
    let mc = d
        .monte_carlo(&a, true, d.trials(&a), spec.montecarlo.seed, None)
        .unwrap();
    assert_eq!(chosen.yield_fraction(), Some(mc.yield_fraction));
}

/// Common random numbers: the first candidate is the ladder for the
/// specification itself, and its boards are the plain design's, board
/// for board, so its yield is the plain design's exactly.
#[test]
fn the_first_candidate_is_the_plain_design_on_the_same_boards() {
    let spec = example_with(
        "rumble-highpass.toml",
        "\n[yield]\ntarget = 0.99\nmax_extra_order = 0\n",
    );
    let (d, _) = searched(&spec);
    let s = d.yield_search.as_ref().unwrap();
    let first = &s.candidates[0];
    assert_eq!(
        (first.order, first.margins),
        (s.minimum_order, Margins::NONE)
    );
    let CandidateResult::Measured { boards, .. } = first.result else {
        panic!("{first:?}");
    };
    let plain = design(&spec).unwrap();
    let a = plain.active().unwrap();
    let mc = plain
        .monte_carlo(&a, true, boards, spec.montecarlo.seed, None)
        .unwrap();
    assert_eq!(first.yield_fraction(), Some(mc.yield_fraction));
}

/// Limits of one side of the specification.
fn side(d: &Design, passband: bool) -> Mask {
    let limits: Vec<Limit> = d
        .mask_limits()
        .into_iter()
        .filter(|l| (l.min_db > f64::NEG_INFINITY) == passband)
        .collect();
    Mask::new(limits).unwrap()
}

/// The vibration example (a 7th-order elliptic lowpass, 0.1 dB, 70 dB)
/// misses 99 % at every order the search may take with 5 % capacitors;
/// the delivered design (a) keeps, as the passive ideal with exact
/// values, the margins it was synthesized with: the passband no deeper
/// than the ripple less its margin, the stopband at least its extra
/// attenuation below the limit; (b) says which tolerance would reach the
/// target; and (c) a design file with that tolerance for every capacitor
/// (at least as tight as the suggestion for one class) reaches it.
#[test]
fn a_missed_target_keeps_its_margins_and_names_a_tolerance_that_reaches_it() {
    let spec = example_with("vibration-antialias.toml", "\n[yield]\ntarget = 0.99\n");
    let (d, _) = searched(&spec);
    let s = d.yield_search.as_ref().unwrap();
    assert!(!s.reached);
    let m = d.margins;
    assert!(m.passband_ripple_db > 0.0 && m.edge_scale > 1.0, "{m:?}");
    let grid = d.monte_carlo_grid().unwrap();
    let gain = nocoil::analysis::trace(&d.passive, &grid, false)
        .unwrap()
        .gain_db;
    let pass = side(&d, true).verdict(&grid, &gain).unwrap();
    let stop = side(&d, false).verdict(&grid, &gain).unwrap();
    // The ripple minima touch the prototype's own ripple: the margin is
    // the one chosen, to the mask's slack (1e-6 dB) and the grid's
    // sampling of the ripple (which can only read a shallower loss).
    assert!(
        pass.margin_db >= m.passband_ripple_db - 1e-5,
        "{pass:?} {m:?}"
    );
    assert!(
        stop.margin_db >= m.stopband_attenuation_db - 1e-5,
        "{stop:?} {m:?}"
    );
    let suggestion = s
        .tolerance_changes
        .iter()
        .find(|c| c.reaches_target)
        .expect("a tolerance change that reaches 99 %");
    let class = suggestion.class.expect("one class").to_string();
    assert!(class.contains("capacitors"), "{suggestion:?}");
    let tightened = example_with(
        "vibration-antialias.toml",
        &format!(
            "\n[yield]\ntarget = 0.99\n[parts]\ncapacitor_tolerance = {}\n",
            suggestion.tolerance
        ),
    );
    let (t, _) = searched(&tightened);
    let ts = t.yield_search.as_ref().unwrap();
    assert!(ts.reached, "{:?}", ts.chosen());
}

/// The delivered design's yield before tuning against an independent
/// Monte Carlo in ngspice on its own soldered deck (see
/// `tuning::ngspice_yield_z`), searched without op-amp spread (which
/// ngspice's `alter` cannot vary): within the 99 % two-proportion
/// interval (common practice).
fn delivered_agrees_with_ngspice(spec: &Spec) {
    let (mut d, a) = searched(spec);
    // The check reads magnitudes from ngspice: a [delay] bound (the echo
    // example's) is left to nocoil's own delay checks, and both sides
    // judge the boards by the magnitude mask alone.
    d.spec.delay = None;
    let z = ngspice_yield_z(&d, &a);
    assert!(z.abs() < Z99, "{}: z = {z}", spec.file.display());
}

/// The search's goal without op-amp spread.
const GOAL_NO_SPREAD: &str = "\n[yield]\ntarget = 0.99\n[montecarlo]\ngbw_spread = 0\n";

/// The vibration example, whose delivered design (ripple and floor
/// margins, edge pre-widened, a higher order) yields about half its
/// boards before tuning, where a wrong draw or a wrong margin shows most.
#[test]
fn the_delivered_vibration_design_agrees_with_ngspice() {
    let spec = example_with("vibration-antialias.toml", GOAL_NO_SPREAD);
    delivered_agrees_with_ngspice(&spec);
}

/// The other examples with a `[yield]` table.
#[test]
fn the_other_delivered_examples_agree_with_ngspice() {
    for file in [
        "birdsong-bandpass.toml",
        "echo-timing-bessel.toml",
        "mains-notch.toml",
        "rumble-highpass.toml",
    ] {
        delivered_agrees_with_ngspice(&example_with(file, GOAL_NO_SPREAD));
    }
}

/// The Q = 20 bandpass and the 60 Hz bandstop the design-for-yield issue
/// names (tuning::BAND_FILTERS).
#[test]
fn the_delivered_band_filters_agree_with_ngspice() {
    for (name, text) in &crate::tuning::BAND_FILTERS[1..] {
        let path = Path::new(name).with_extension("toml");
        let spec = Spec::from_toml(&path, &(text.to_string() + GOAL_NO_SPREAD)).unwrap();
        delivered_agrees_with_ngspice(&spec);
    }
}

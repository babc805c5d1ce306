//! The active stage: every inductor of the passive ideal replaced by
//! op-amp converters, so the network keeps the ladder's low sensitivity
//! without a coil.
//!
//! Input: the scaled passive ideal as a [`Netlist`] (an `AC` source `V`
//! from node `in` to ground, the source resistor from `in` into the
//! ladder, the load across node `out`; only R, L and C besides the
//! source). Output: an [`ActiveBuild`] whose netlist keeps that contract
//! and holds no inductor. This module speaks only the netlist type.
//!
//! Methods:
//! - [`Method::Gic`]: every inductor becomes an Antoniou simulated
//!   inductor (Antoniou 1969, Proc. IEE 116): 2 op-amps when one end is
//!   grounded, 4 (two converters and a resistor) when it floats. Works on
//!   any ladder. An L-C pair in series to ground is swapped so the
//!   inductor is the grounded one.
//! - [`Method::Fdnr`]: the Bruton image (Bruton 1969, IEEE Trans. Circuit
//!   Theory 16): R -> C, L -> R, C -> FDNR (2 op-amps each), DC-path
//!   resistors across the termination capacitors and an output follower.
//!   Needs a lowpass ladder whose every capacitor is grounded (after
//!   swapping L-C pairs in series to ground so the capacitor is the
//!   grounded one).
//! - [`Method::Auto`]: the one with fewer op-amps; a tie goes to
//!   simulated inductors, which keep the ladder's resistive terminations
//!   and need no DC-path resistors.
//!
//! Invariants of a returned build: its netlist validates, has no
//! inductor, every op-amp has the model of [`Options::opamp`], and, when
//! that model has a finite bandwidth, it is stable ([`is_stable`]); an
//! unstable network is an error, never a result.
//!
//! Finite gain-bandwidth: when the balanced build deviates from the
//! passive ideal by more than [`REFINE_FRACTION`] of the passband ripple
//! (or always, or never: [`Refine`]), every converter is compensated at
//! the balance frequency (`compensate`) and the shared free values are
//! refined by the simplex (`refine`); a build still outside the ripple
//! carries [`Note::BeyondRipple`] with the gain-bandwidth that would hold
//! it, found by rebuilding the same way.
//!
//! Files: `gic` (the converter cell and its polarities), `passive`
//! (reading the contract, series swaps), `build` (assembling each
//! method), `compensate` (each converter's value error cancelled at the
//! balance frequency), `refine` (deviation and the simplex),
//! `stability`.

mod build;
pub mod chain;
mod compensate;
mod damping;
mod error;
pub mod gic;
mod passive;
mod refine;
mod stability;

use std::f64::consts::TAU;

pub use compensate::realized_value;
pub use damping::{lc_pairs, DampingResistor, LcPair};
pub use error::ActiveError;
pub use refine::{deviation_db, Meter, PASSBAND_POINTS};
pub use stability::{
    corner_models, corner_verdicts, is_stable, natural_frequencies, roots_and_verdict, with_model,
    CornerVerdict, NaturalFrequency, StabilityVerdict, OUTPUT_OHM_FACTORS, STABILITY_MARGIN,
};

use build::{bruton_terminations, dc_path_resistors, fdnr_opamps, gic_opamps, Bruton, Plan};
use gic::Tuning;
use passive::Passive;

use crate::circuit::netlist::check_model;
use crate::circuit::{log_grid, Element, ElementKind, Netlist, OpAmpModel};

/// How the inductors are removed (`[active] method` of a design file).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Method {
    /// The realization with fewer op-amps (see the module documentation).
    Auto,
    /// Simulated inductors (grounded and floating GICs).
    Gic,
    /// The Bruton FDNR image (lowpass ladders with grounded capacitors).
    Fdnr,
}

impl std::fmt::Display for Method {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Method::Auto => "auto",
            Method::Gic => "GIC",
            Method::Fdnr => "FDNR",
        })
    }
}

/// When the converters' free values are refined (`[active] optimize` of
/// a design file: left out, `true`, `false`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Refine {
    /// When the balanced build deviates from the passive ideal by more
    /// than [`REFINE_FRACTION`] of the passband ripple.
    Auto,
    /// Always.
    Always,
    /// Never: the balanced values as they are.
    Never,
}

impl std::fmt::Display for Refine {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Refine::Auto => "when needed",
            Refine::Always => "always",
            Refine::Never => "never",
        })
    }
}

/// The share of the passband ripple the active exact build may spend on
/// the op-amps before [`Refine::Auto`] compensates and refines it: the
/// rest of the ripple budget is for the parts (snapping, tolerances, the
/// Monte Carlo yield), which on the demos take 0.08 to 0.5 dB of
/// deviation (README, active on parts), so the op-amps are held to a
/// tenth of the ripple (common practice: an error budget in which one
/// contribution stays an order below the total). The balanced builds of
/// the examples spend 0.3 % to 12 % of their ripple (measured when this
/// was written: only the vibration demo, at 0.0117 of 0.1 dB on 10 MHz op-amps,
/// crosses it).
pub const REFINE_FRACTION: f64 = 0.1;

/// The gain-bandwidth search of [`Note::BeyondRipple`] aims the
/// first-order prediction (deviation in proportion to 1/GBW) at this
/// share of the ripple, so that the first rebuild usually lands inside.
const GBW_AIM_FRACTION: f64 = 0.8;

/// Rebuilds allowed to the search before it gives up on finding a
/// gain-bandwidth inside the ripple: each multiplies the GBW by the
/// predicted factor, at least [`GBW_MIN_STEP`], so eight reach at least
/// 16 times the GBW asked for.
const GBW_SEARCH_REBUILDS: usize = 8;

/// The smallest factor one search step puts on the GBW, so a prediction
/// that falls just short does not creep.
const GBW_MIN_STEP: f64 = std::f64::consts::SQRT_2;

/// Halvings (in log GBW) of the interval between the last failing and the
/// first passing gain-bandwidth: six give the required GBW to within
/// 2^-6 of that interval's ratio, about 1 % for a factor-of-two bracket.
const GBW_BISECTIONS: usize = 6;

/// Default impedance level of the converters' balanced elements, ohm: in
/// the middle of the 1 kohm to 100 kohm range where op-amp output loading
/// (below) and noise and stray capacitance (above) stay small (common
/// practice).
pub const DEFAULT_IMPEDANCE_OHM: f64 = 10e3;

/// Default FDNR DC-path factor wb T (see [`Options::dc_path_factor`]):
/// the deviation it leaves is of order 1/K near the balance frequency,
/// 1e-4 relative or about 1e-3 dB, a tenth of the 0.01 dB the active
/// network is held to against the passive ideal (measured with ideal
/// op-amps on the fixture's lowpass designs, orders 4 to 25: at most
/// 1.8e-3 dB). The resistors come out near K times the converters' level
/// (about 100 Mohm at 10 kohm), so an FDNR image's level is lowered to
/// keep them within a bound (see `fdnr_level_ohm`).
pub const DEFAULT_DC_PATH_FACTOR: f64 = 1e4;

/// How far below the balance frequency the DC-path resistors' effect is
/// reported: four decades reach well below 1/T = wb/K for the default K,
/// where the effect has its low-frequency plateau.
const DC_PATH_SPAN: f64 = 1e4;

/// What to build, and with which op-amps.
#[derive(Debug, Clone, PartialEq)]
pub struct Options {
    /// The method.
    pub method: Method,
    /// The op-amp model of every converter and buffer.
    pub opamp: OpAmpModel,
    /// Where the converters are balanced, Hz (near the passband edge,
    /// where the response is most sensitive to their errors).
    pub balance_hz: f64,
    /// When to compensate the converters and refine their free values
    /// numerically (balance point and a trim correction) to minimize the
    /// largest passband deviation from the passive ideal with
    /// [`Options::opamp`]. Anything but [`Refine::Never`] needs
    /// [`Options::passband_hz`]; [`Refine::Auto`] also needs
    /// [`Options::passband_ripple_db`].
    pub optimize: Refine,
    /// The specification's passband ripple, dB: the deviation
    /// [`Refine::Auto`] weighs against, and the limit past which the
    /// build carries [`Note::BeyondRipple`].
    pub passband_ripple_db: Option<f64>,
    /// Impedance level of the converters' balanced elements, ohm.
    pub impedance_ohm: f64,
    /// Passbands `[low, high]`, Hz, where deviations are measured and
    /// minimized; may be empty when `optimize` is off.
    pub passband_hz: Vec<[f64; 2]>,
    /// FDNR only: wb T, the DC-path time constant T of the termination
    /// branches against the balance frequency; larger values disturb the
    /// passband less and need larger resistors (Rb = T RL / tau).
    pub dc_path_factor: f64,
    /// FDNR only: the largest DC-path resistor, ohm (infinite: no bound;
    /// the parts a design buys from set one); the converters' level, and
    /// below its floor the factor, is lowered to keep both within it.
    pub dc_path_max_ohm: f64,
    /// Relative spread of the op-amps' gain-bandwidth: the stability
    /// verdict is repeated at its corners (see [`corner_models`]).
    pub gbw_spread: f64,
}

impl Options {
    /// Automatic method, ideal op-amps, no refinement, the default
    /// impedance level and DC-path factor, balanced at `balance_hz`.
    pub fn new(balance_hz: f64) -> Options {
        Options {
            method: Method::Auto,
            opamp: OpAmpModel::Ideal,
            balance_hz,
            optimize: Refine::Never,
            passband_ripple_db: None,
            impedance_ohm: DEFAULT_IMPEDANCE_OHM,
            passband_hz: Vec::new(),
            dc_path_factor: DEFAULT_DC_PATH_FACTOR,
            dc_path_max_ohm: f64::INFINITY,
            gbw_spread: 0.0,
        }
    }

    /// Checks every value.
    fn check(&self) -> Result<(), ActiveError> {
        check_model("opamp", &self.opamp).map_err(ActiveError::OpAmp)?;
        let positive = |option, value: f64| {
            if value.is_finite() && value > 0.0 {
                Ok(())
            } else {
                Err(ActiveError::BadOption {
                    option,
                    accepted: "finite and > 0",
                    value,
                })
            }
        };
        positive("balance_hz", self.balance_hz)?;
        positive("impedance_ohm", self.impedance_ohm)?;
        positive("dc_path_factor", self.dc_path_factor)?;
        if self.dc_path_max_ohm.is_nan() || self.dc_path_max_ohm <= 0.0 {
            return Err(ActiveError::BadOption {
                option: "dc_path_max_ohm",
                accepted: "> 0 (infinite: no bound)",
                value: self.dc_path_max_ohm,
            });
        }
        if !(0.0..1.0).contains(&self.gbw_spread) {
            return Err(ActiveError::BadOption {
                option: "gbw_spread",
                accepted: "0 <= spread < 1",
                value: self.gbw_spread,
            });
        }
        if self.optimize != Refine::Never && self.passband_hz.is_empty() {
            return Err(ActiveError::NoPassband);
        }
        if let Some(ripple) = self.passband_ripple_db {
            positive("passband_ripple_db", ripple)?;
        } else if self.optimize == Refine::Auto {
            positive("passband_ripple_db", f64::NAN)?;
        }
        Ok(())
    }
}

/// What a [`Stage`] is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum StageKind {
    /// One GIC and its load: an inductor with one end at ground.
    GroundedInductor,
    /// Two GICs joined by a resistor: an inductor between two nodes.
    FloatingInductor,
    /// One GIC and its load capacitor: Zin = 1/(s^2 D) to ground.
    Fdnr,
    /// The FDNR image of an inductor: a resistor.
    Resistor,
    /// The FDNR image of a termination resistor: a capacitor with its
    /// DC-path resistor across it.
    Termination,
    /// The unity-gain follower that drives `out` in the FDNR image.
    Buffer,
}

impl std::fmt::Display for StageKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            StageKind::GroundedInductor => "grounded simulated inductor",
            StageKind::FloatingInductor => "floating simulated inductor",
            StageKind::Fdnr => "FDNR",
            StageKind::Resistor => "FDNR-image resistor",
            StageKind::Termination => "FDNR-image termination",
            StageKind::Buffer => "output buffer",
        })
    }
}

/// One group of elements of the active network and what it stands for.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Stage {
    /// What it is.
    pub kind: StageKind,
    /// The passive element it replaces (`None` for the buffer).
    pub replaces: Option<String>,
    /// The value it realizes with ideal op-amps: henry (inductors), farad
    /// second for an FDNR's D, ohm (resistor), farad (termination
    /// capacitor), 1 for the buffer's gain.
    pub value: f64,
    /// The nodes it connects to, by name.
    pub nodes: Vec<String>,
    /// Its passive elements (R, C), by name.
    pub elements: Vec<String>,
    /// Its op-amps, by name.
    pub opamps: Vec<String>,
    /// Its elements by index in the build's netlist, typed by their role.
    pub handles: Handles,
}

/// The elements of a [`Stage`] by index in its build's netlist, typed by
/// their role, so the parts stage needs no names to find them.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub enum Handles {
    /// A converter: its GIC chains (a floating inductor has two, sharing
    /// Z5).
    Converter(Vec<chain::Chain>),
    /// The FDNR image of a termination: its capacitor and the DC-path
    /// resistor across it.
    Termination {
        /// The capacitor, the image of the termination resistor.
        capacitor: usize,
        /// The DC-path resistor.
        dc_path: usize,
    },
    /// The one element standing for the replaced one (the FDNR image of
    /// an inductor: a resistor).
    Element(usize),
    /// The output buffer: no resistor or capacitor.
    Buffer,
}

/// Why a method was used: what was asked, what each method needs in
/// op-amps, and what keeps the FDNR image out when it is.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Why {
    /// The method the design asked for.
    pub asked: Method,
    /// The method used ([`Method::Gic`] or [`Method::Fdnr`]).
    pub used: Method,
    /// Op-amps of the simulated-inductor build.
    pub gic_opamps: usize,
    /// Its grounded inductors (one converter each).
    pub grounded_inductors: usize,
    /// Its floating inductors (two converters each).
    pub floating_inductors: usize,
    /// Op-amps of the FDNR image, when the ladder allows one.
    pub fdnr_opamps: Option<usize>,
    /// What keeps the ladder from an FDNR image (naming the element),
    /// when something does.
    pub fdnr_obstacle: Option<String>,
}

/// A DC-path resistor of the FDNR image.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct DcPathResistor {
    /// Its designator.
    pub designator: String,
    /// Its value, ohm.
    pub ohm: f64,
}

/// A fact about a realization worth telling the designer.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "note", rename_all = "snake_case")]
pub enum Note {
    /// An L-C pair in series from `node` to ground was swapped so that
    /// `grounded` ends at ground.
    SeriesSwap {
        /// The element now at ground.
        grounded: String,
        /// The other element of the pair.
        other: String,
        /// The node the pair hangs from.
        node: String,
    },
    /// The refinement of the converters' free values.
    Refined {
        /// The balance frequency found, Hz.
        balance_hz: f64,
        /// The trim correction found.
        correction: f64,
        /// Largest passband deviation with the balanced values, dB.
        balanced_deviation_db: f64,
        /// The same with each converter compensated at the balance
        /// frequency, before the simplex, dB.
        compensated_deviation_db: f64,
        /// The same with the refined values, dB.
        refined_deviation_db: f64,
    },
    /// The active exact build deviates from the passive ideal by more
    /// than the passband ripple (after compensation and refinement when
    /// they ran).
    BeyondRipple {
        /// Largest passband deviation, dB.
        deviation_db: f64,
        /// The specification's passband ripple, dB.
        ripple_db: f64,
        /// The op-amps' gain-bandwidth, Hz.
        gbw_hz: f64,
        /// The smallest gain-bandwidth found at which the build, made the
        /// same way, stays within the ripple (checked by a rebuild), Hz;
        /// `None` when the search gave up.
        required_gbw_hz: Option<f64>,
    },
    /// The refined values gave an unstable network; the balanced ones are
    /// kept.
    RefinedUnstable {
        /// The least-damped natural frequency of the refined network.
        root: NaturalFrequency,
    },
    /// Loops of series L-C pairs or cutsets of L-C tanks resonant at one
    /// frequency (see `damping.rs`), damped by a resistor at each.
    Damped {
        /// The loops' resonance, Hz.
        loop_hz: f64,
        /// The quality factor every damped pair was given.
        q: f64,
        /// The resistors added.
        resistors: Vec<DampingResistor>,
    },
    /// The FDNR image's DC gain, held at the ladder's by DC-path
    /// resistors across the termination capacitors.
    DcPath {
        /// The image's DC gain, dB.
        dc_gain_db: f64,
        /// The ladder's, dB.
        ladder_dc_gain_db: f64,
        /// The DC-path resistors.
        resistors: Vec<DcPathResistor>,
    },
    /// How far the DC-path resistors move the response below the balance
    /// frequency (ideal op-amps, so only their effect shows).
    DcPathEffect {
        /// Largest deviation from the passive ideal, dB.
        deviation_db: f64,
        /// From, Hz.
        from_hz: f64,
        /// To (the balance frequency), Hz.
        to_hz: f64,
    },
}

/// The active network and what a designer needs to compare builds.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ActiveBuild {
    /// The network: `in`, `out`, an `AC 1`-style source as in the passive
    /// netlist, no inductor.
    pub netlist: Netlist,
    /// The method used ([`Method::Gic`] or [`Method::Fdnr`], never
    /// `Auto`).
    pub method_used: Method,
    /// Why that method.
    pub why: Why,
    /// Number of op-amps.
    pub opamps: usize,
    /// Number of capacitors.
    pub capacitors: usize,
    /// Largest over smallest capacitance (1 with fewer than two).
    pub capacitor_spread: f64,
    /// Which elements and op-amps form which converter.
    pub stages: Vec<Stage>,
    /// Series swaps, the FDNR DC-gain effect, the refinement's outcome.
    pub notes: Vec<Note>,
    /// Largest deviation from the passive ideal over
    /// [`Options::passband_hz`] with [`Options::opamp`], dB (`None`
    /// without passbands).
    pub passband_deviation_db: Option<f64>,
    /// The stability verdict with [`Options::opamp`] (always stable), or
    /// `None` for ideal op-amps: a nullor has no dynamics, so stability is
    /// decided with a finite-bandwidth model.
    pub stability: Option<StabilityVerdict>,
    /// The verdict repeated at the corners of the op-amps' spread (empty
    /// for ideal op-amps); a corner may be unstable, which the summary
    /// says first.
    pub corners: Vec<CornerVerdict>,
}

/// Builds the active network of `passive` (see the module documentation).
pub fn realize(passive: &Netlist, opts: &Options) -> Result<ActiveBuild, ActiveError> {
    opts.check()?;
    let balanced = Tuning {
        level_ohm: opts.impedance_ohm,
        balance_rad_s: TAU * opts.balance_hz,
        correction: 1.0,
        compensate: false,
    };
    let (plan, why, mut notes, balanced) = choose(&Passive::read(passive)?, opts, &balanced)?;
    let plan = damped(plan, opts, &balanced, &mut notes)?;
    let grid = refine::passband_grid(&opts.passband_hz)?;
    let meter = Meter::new(passive, grid)?;
    let balanced_deviation_db = match meter.grid().is_empty() {
        true => None,
        false => Some(meter.deviation(&plan.assemble(&balanced, opts.opamp)?.0)?),
    };
    let refine = match (
        opts.optimize,
        balanced_deviation_db,
        opts.passband_ripple_db,
    ) {
        (Refine::Always, ..) => true,
        (Refine::Auto, Some(d), Some(ripple)) => {
            opts.opamp.gbw_hz().is_some() && d > REFINE_FRACTION * ripple
        }
        _ => false,
    };
    let (tuning, compensated_deviation_db) = match (refine, balanced_deviation_db) {
        (true, Some(before)) => {
            let (tuning, compensated) = refined(&plan, &balanced, opts.opamp, &meter)?;
            // The simplex starts from the compensated values, which can be
            // a hair worse than the balanced ones on a build already near
            // exact: the balanced values are kept then.
            match meter.deviation(&plan.assemble(&tuning, opts.opamp)?.0)? <= before {
                true => (tuning, compensated),
                false => (balanced, compensated),
            }
        }
        _ => (balanced, f64::NAN),
    };
    let (netlist, stages, stability) = stable_build(&plan, &tuning, &balanced, opts, &mut notes)?;
    let passband_deviation_db = match meter.grid().is_empty() {
        true => None,
        false => Some(meter.deviation(&netlist)?),
    };
    if let (true, Some(before), Some(after)) =
        (refine, balanced_deviation_db, passband_deviation_db)
    {
        notes.push(Note::Refined {
            balance_hz: tuning.balance_rad_s / TAU,
            correction: tuning.correction,
            balanced_deviation_db: before,
            compensated_deviation_db,
            refined_deviation_db: after,
        });
    }
    if let (Some(deviation_db), Some(ripple_db), Some(gbw_hz)) = (
        passband_deviation_db,
        opts.passband_ripple_db,
        opts.opamp.gbw_hz(),
    ) {
        if deviation_db > ripple_db {
            let search = GbwSearch {
                plan: &plan,
                balanced: &balanced,
                model: opts.opamp,
                meter: &meter,
                refine,
                ripple_db,
            };
            notes.push(Note::BeyondRipple {
                deviation_db,
                ripple_db,
                gbw_hz,
                required_gbw_hz: search.required(gbw_hz, deviation_db)?,
            });
        }
    }
    if let Plan::Fdnr(..) = plan {
        notes.extend(dc_path_notes(
            passive,
            &plan,
            &tuning,
            (&netlist, &stages),
            opts.balance_hz,
        )?);
    }
    let corners = corner_verdicts(&netlist, &corner_models(&opts.opamp, opts.gbw_spread))?;
    Ok(ActiveBuild {
        corners,
        method_used: method_of(&plan),
        why,
        opamps: netlist.count(ElementKind::OpAmp),
        capacitors: netlist.count(ElementKind::Capacitor),
        capacitor_spread: capacitor_spread(&netlist),
        netlist,
        stages,
        notes,
        passband_deviation_db,
        stability,
    })
}

/// The free values the simplex finds, starting from the balanced ones
/// with every converter compensated (each cost evaluation compensates
/// again at its own balance frequency), and the deviation of that start.
fn refined(
    plan: &Plan,
    balanced: &Tuning,
    model: OpAmpModel,
    meter: &Meter,
) -> Result<(Tuning, f64), ActiveError> {
    let start = Tuning {
        compensate: true,
        ..*balanced
    };
    let cost = |x: [f64; 2]| meter.deviation(&plan.assemble(&tuned(&start, x), model)?.0);
    let compensated = cost([0.0, 0.0])?;
    let (best, _) = refine::nelder_mead(cost, [0.0, 0.0])?;
    Ok((tuned(&start, best), compensated))
}

/// The search for the gain-bandwidth that holds a build within the
/// ripple: the same plan rebuilt the same way (compensated and refined
/// when the build was) with faster op-amps of the same model.
struct GbwSearch<'a> {
    plan: &'a Plan,
    balanced: &'a Tuning,
    model: OpAmpModel,
    meter: &'a Meter,
    refine: bool,
    ripple_db: f64,
}

impl GbwSearch<'_> {
    /// The largest passband deviation at `gbw_hz`, dB.
    fn deviation(&self, gbw_hz: f64) -> Result<f64, ActiveError> {
        let model = self.model.with_gbw(gbw_hz);
        let tuning = match self.refine {
            true => refined(self.plan, self.balanced, model, self.meter)?.0,
            false => *self.balanced,
        };
        self.meter.deviation(&self.plan.assemble(&tuning, model)?.0)
    }

    /// From `deviation_db` at `gbw_hz` (beyond the ripple): steps on the
    /// first-order rule (deviation in proportion to 1/GBW, the op-amps'
    /// value error being k w/wt), its exponent corrected by each rebuild
    /// (a secant in log-log), until a rebuild stays within the ripple;
    /// then bisects in log GBW between the last failing and that passing
    /// value. Returns the smallest passing GBW, each one checked by a
    /// rebuild; `None` after [`GBW_SEARCH_REBUILDS`] failures.
    fn required(&self, gbw_hz: f64, deviation_db: f64) -> Result<Option<f64>, ActiveError> {
        let aim = GBW_AIM_FRACTION * self.ripple_db;
        let (mut low, mut d_low) = (gbw_hz, deviation_db);
        let mut exponent = 1.0;
        let mut high = None;
        for _ in 0..GBW_SEARCH_REBUILDS {
            let next = low * (d_low / aim).powf(1.0 / exponent).max(GBW_MIN_STEP);
            let d = self.deviation(next)?;
            if d <= self.ripple_db {
                high = Some(next);
                break;
            }
            // Keep the exponent between the first and the third order so
            // one flat or noisy step does not send the next far off.
            exponent = ((d_low / d).ln() / (next / low).ln()).clamp(1.0, 3.0);
            (low, d_low) = (next, d);
        }
        let Some(mut high) = high else {
            return Ok(None);
        };
        for _ in 0..GBW_BISECTIONS {
            let mid = (low * high).sqrt();
            match self.deviation(mid)? <= self.ripple_db {
                true => high = mid,
                false => low = mid,
            }
        }
        Ok(Some(high))
    }
}

/// The network for `tuning`, or for the balanced values if the refined
/// ones are unstable; an error if that is unstable too.
fn stable_build(
    plan: &Plan,
    tuning: &Tuning,
    balanced: &Tuning,
    opts: &Options,
    notes: &mut Vec<Note>,
) -> Result<(Netlist, Vec<Stage>, Option<StabilityVerdict>), ActiveError> {
    let (netlist, stages) = plan.assemble(tuning, opts.opamp)?;
    let stability = verdict(&netlist, &opts.opamp)?;
    match stability {
        Some(v) if !v.stable && tuning != balanced => {
            if let Some(root) = v.least_damped {
                notes.push(Note::RefinedUnstable { root });
            }
            stable_build(plan, balanced, balanced, opts, notes)
        }
        Some(v) if !v.stable => Err(unstable(plan, &v, opts.opamp)),
        _ => Ok((netlist, stages, stability)),
    }
}

/// The error for a build whose verdict `v` (with `opamp`) is unstable.
fn unstable(plan: &Plan, v: &StabilityVerdict, opamp: OpAmpModel) -> ActiveError {
    ActiveError::Unstable {
        method: method_of(plan),
        root: v
            .least_damped
            .unwrap_or(NaturalFrequency::of(num_complex::Complex64::new(0.0, 0.0))),
        opamp,
        margin: STABILITY_MARGIN,
    }
}

/// The largest quality factor given to the resonators of a loop or
/// cutset: damping ratio 5e-7, far above [`STABILITY_MARGIN`], while the
/// uniform loss moves the passband by about 3e-4 dB even on a 9th-order
/// elliptic bandstop (measured: 0.33 dB at Q = 1000 near its 400 Hz
/// edge, in proportion to 1/Q).
pub const DAMPING_Q_MAX: f64 = 1e6;

/// The damping the loops get beyond what the op-amps take away, as a
/// factor on that: the op-amps' effect is first order in 1/GBW, so twice
/// it at the slowest corner leaves the loop modes as damped as the
/// op-amps' drift again.
const DAMPING_SAFETY: f64 = 2.0;

/// Each retry divides Q by this when the predicted Q left a corner
/// unstable; [`DAMPING_RETRIES`] of them reach Q / 1000.
const DAMPING_STEP: f64 = 2.0;
const DAMPING_RETRIES: usize = 10;

/// The plan with its resonant loops and cutsets damped (see
/// `damping.rs`), at the quality factor that keeps the build stable at
/// the nominal op-amp and every corner of its spread: predicted from the
/// least-damped natural frequency of the undamped build at those corners
/// (the damping ratios add to first order: the resistors give the loop
/// modes 1/(2Q)), capped at [`DAMPING_Q_MAX`], then checked and lowered
/// while a corner is unstable. The plan itself when it has no such loop.
fn damped(
    plan: Plan,
    opts: &Options,
    balanced: &Tuning,
    notes: &mut Vec<Note>,
) -> Result<Plan, ActiveError> {
    let Plan::Gic(passive) = &plan else {
        return Ok(plan);
    };
    let loops = damping::resonant_loops(passive);
    let Some(first) = loops.first() else {
        return Ok(plan);
    };
    let models: Vec<OpAmpModel> = std::iter::once(opts.opamp)
        .chain(corner_models(&opts.opamp, opts.gbw_spread))
        .collect();
    // The least-damped verdict over the models, or None when all are
    // stable (or the op-amps are ideal).
    let worst = |netlist: &Netlist| -> Result<Option<(StabilityVerdict, OpAmpModel)>, ActiveError> {
        let mut worst: Option<(StabilityVerdict, OpAmpModel)> = None;
        for &model in &models {
            if let Some(v) = verdict(&with_model(netlist, model), &model)? {
                let zeta = |v: &StabilityVerdict| v.least_damped.map_or(1.0, |r| r.damping_ratio);
                if worst.as_ref().is_none_or(|(w, _)| zeta(&v) < zeta(w)) {
                    worst = Some((v, model));
                }
            }
        }
        Ok(worst)
    };
    let undamped = plan.assemble(balanced, opts.opamp)?.0;
    let drift = worst(&undamped)?
        .and_then(|(v, _)| v.least_damped)
        .map_or(0.0, |r| (-r.damping_ratio).max(0.0));
    let mut q = match drift > 0.0 {
        true => (1.0 / (2.0 * DAMPING_SAFETY * drift)).min(DAMPING_Q_MAX),
        false => DAMPING_Q_MAX,
    };
    let mut failed = None;
    for _ in 0..=DAMPING_RETRIES {
        let (candidate, resistors) = damping::damp(passive, &loops, q)?;
        let candidate = Plan::Gic(candidate);
        let netlist = candidate.assemble(balanced, opts.opamp)?.0;
        match worst(&netlist)? {
            Some((v, model)) if !v.stable => failed = Some(unstable(&candidate, &v, model)),
            _ => {
                notes.push(Note::Damped {
                    loop_hz: first.w_rad_s / TAU,
                    q,
                    resistors,
                });
                return Ok(candidate);
            }
        }
        q /= DAMPING_STEP;
    }
    Err(failed.expect("at least one damping was tried"))
}

/// The stability verdict with a finite-bandwidth model; `None` with
/// ideal op-amps, whose nullor rows carry no dynamics of their own (the
/// roots of such a network are the passive ones plus degenerate ones, such
/// as the floating inductor's undetermined port currents at exactly 0 Hz).
fn verdict(netlist: &Netlist, model: &OpAmpModel) -> Result<Option<StabilityVerdict>, ActiveError> {
    match model {
        OpAmpModel::Ideal => Ok(None),
        OpAmpModel::SinglePole { .. } | OpAmpModel::TwoPole { .. } => Ok(Some(is_stable(netlist)?)),
    }
}

/// The balanced values moved by exp(x): x[0] on the balance frequency,
/// x[1] on the trim correction.
fn tuned(balanced: &Tuning, x: [f64; 2]) -> Tuning {
    Tuning {
        balance_rad_s: balanced.balance_rad_s * x[0].exp(),
        correction: balanced.correction * x[1].exp(),
        ..*balanced
    }
}

fn method_of(plan: &Plan) -> Method {
    match plan {
        Plan::Gic(_) => Method::Gic,
        Plan::Fdnr(..) => Method::Fdnr,
    }
}

/// Both methods' orientations of one passive netlist, and the method a
/// build of it uses.
struct Candidates {
    /// Oriented for simulated inductors, and the notes of its swaps.
    gic: (Passive, Vec<Note>),
    /// Oriented for the FDNR image, and the notes of its swaps.
    fdnr: (Passive, Vec<Note>),
    /// The FDNR image's terminations, or what keeps the ladder from one.
    terminations: Result<(usize, usize), String>,
    /// Op-amps of the simulated-inductor build and of the FDNR image.
    opamps: (usize, usize),
    /// Whether the FDNR image is built.
    use_fdnr: bool,
}

impl Candidates {
    /// Orients `base` for both methods and decides which one serves
    /// `asked`; an FDNR image asked for a ladder that has none is an error.
    fn new(base: &Passive, asked: Method) -> Result<Candidates, ActiveError> {
        let mut gic = base.clone();
        let gic_notes = gic.ground_series_arms(ElementKind::Inductor);
        let mut fdnr = base.clone();
        let fdnr_notes = fdnr.ground_series_arms(ElementKind::Capacitor);
        let terminations = bruton_terminations(&fdnr);
        let opamps = (gic_opamps(&gic), fdnr_opamps(&fdnr));
        let use_fdnr = match (asked, &terminations) {
            (Method::Gic, _) => false,
            (Method::Fdnr, Ok(_)) => true,
            (Method::Fdnr, Err(offender)) => {
                return Err(ActiveError::NotApplicable {
                    method: Method::Fdnr,
                    needs: build::FDNR_NEEDS,
                    offender: offender.clone(),
                })
            }
            (Method::Auto, Ok(_)) => opamps.1 < opamps.0,
            (Method::Auto, Err(_)) => false,
        };
        Ok(Candidates {
            gic: (gic, gic_notes),
            fdnr: (fdnr, fdnr_notes),
            terminations,
            opamps,
            use_fdnr,
        })
    }
}

/// The converters' level of an FDNR image of terminations `rs`, `rl`:
/// [`Options::impedance_ohm`], or lower so that the DC-path resistors at
/// the full factor stay within [`Options::dc_path_max_ohm`] (Rb = K RL R /
/// sqrt(RS RL), Ra below K RS R / sqrt(RS RL)), but not below
/// [`FDNR_LEVEL_FLOOR`] of it, where the factor gives way instead (see
/// `build::dc_path_resistors`). A lower factor disturbs the passband by
/// about 1 / K: at K = 1e3 a 4th-order Butterworth of unequal
/// terminations read 0.019 dB low a decade below its edge with ideal
/// op-amps (tests/scipy_cases.rs), where the full factor keeps 1e-3 dB.
fn fdnr_level_ohm(opts: &Options, rs: f64, rl: f64) -> f64 {
    let within = opts.dc_path_max_ohm * (rs * rl).sqrt() / (opts.dc_path_factor * rs.max(rl));
    within.clamp(FDNR_LEVEL_FLOOR * opts.impedance_ohm, opts.impedance_ohm)
}

/// How far [`fdnr_level_ohm`] may lower the converters' level: to 1 kohm
/// from the default 10 kohm, the bottom of the range where op-amp output
/// loading stays small (see [`DEFAULT_IMPEDANCE_OHM`]).
pub const FDNR_LEVEL_FLOOR: f64 = 0.1;

/// Whether the build of `passive` for `asked` is the FDNR image (see
/// [`Method::Auto`]). Fails as [`realize`] does when `asked` cannot serve
/// the ladder.
pub fn uses_fdnr(passive: &Netlist, asked: Method) -> Result<bool, ActiveError> {
    Ok(Candidates::new(&Passive::read(passive)?, asked)?.use_fdnr)
}

/// The elements of `passive` (by index) that its build for `asked` keeps
/// as parts at the ladder's own impedance level, the one its terminations
/// set: every resistor and capacitor of a simulated-inductor build, which
/// replaces the inductors alone; none of the FDNR image, whose every
/// element is an image scaled by tau, and tau follows the terminations
/// (see `choose`), so the image does not change with their level. Fails
/// as [`realize`] does when `asked` cannot serve the ladder.
pub fn kept_elements(passive: &Netlist, asked: Method) -> Result<Vec<usize>, ActiveError> {
    if uses_fdnr(passive, asked)? {
        return Ok(Vec::new());
    }
    Ok((0..passive.elements.len())
        .filter(|&i| {
            matches!(
                passive.elements[i].kind(),
                ElementKind::Resistor | ElementKind::Capacitor
            )
        })
        .collect())
}

/// The plan of the method asked for (or chosen), why, the notes of its
/// series swaps, and its balanced free values: `balanced`, or for an
/// FDNR image the level [`fdnr_level_ohm`] gives.
fn choose(
    base: &Passive,
    opts: &Options,
    balanced: &Tuning,
) -> Result<(Plan, Why, Vec<Note>, Tuning), ActiveError> {
    let Candidates {
        gic: (gic, gic_notes),
        fdnr: (fdnr, fdnr_notes),
        terminations,
        opamps,
        use_fdnr,
    } = Candidates::new(base, opts.method)?;
    let (grounded_inductors, floating_inductors) = count_inductors(&gic);
    let why = Why {
        asked: opts.method,
        used: if use_fdnr { Method::Fdnr } else { Method::Gic },
        gic_opamps: opamps.0,
        grounded_inductors,
        floating_inductors,
        fdnr_opamps: terminations.is_ok().then_some(opamps.1),
        fdnr_obstacle: terminations.as_ref().err().cloned(),
    };
    match (use_fdnr, terminations) {
        (true, Ok((source, load))) => {
            let ohm = |i: usize| fdnr.netlist.elements[i].value().unwrap_or(f64::NAN);
            let balanced = Tuning {
                level_ohm: fdnr_level_ohm(opts, ohm(source), ohm(load)),
                ..*balanced
            };
            // wb tau = sqrt(RS RL) / R: the image's impedances at wb sit at
            // the converters' level R where the ladder's sat at its
            // terminations'.
            let tau_s =
                (ohm(source) * ohm(load)).sqrt() / (balanced.level_ohm * balanced.balance_rad_s);
            let mut bruton = Bruton {
                tau_s,
                source,
                load,
                dc_path_ohm: [f64::NAN; 2],
            };
            dc_path_resistors(
                &fdnr,
                &mut bruton,
                &balanced,
                opts.dc_path_factor,
                opts.dc_path_max_ohm,
            )?;
            Ok((Plan::Fdnr(fdnr, bruton), why, fdnr_notes, balanced))
        }
        _ => Ok((Plan::Gic(gic), why, gic_notes, *balanced)),
    }
}

/// The grounded and the floating inductors of an oriented netlist.
fn count_inductors(passive: &Passive) -> (usize, usize) {
    let (mut grounded, mut floating) = (0, 0);
    for e in &passive.netlist.elements {
        if let Element::Inductor { .. } = e {
            match passive::grounded_at(e) {
                Some(_) => grounded += 1,
                None => floating += 1,
            }
        }
    }
    (grounded, floating)
}

/// Largest over smallest capacitance; 1 with fewer than two capacitors.
fn capacitor_spread(netlist: &Netlist) -> f64 {
    let farads: Vec<f64> = netlist
        .elements
        .iter()
        .filter_map(|e| match e {
            Element::Capacitor { farad, .. } => Some(*farad),
            _ => None,
        })
        .collect();
    let max = farads.iter().copied().fold(f64::NAN, f64::max);
    let min = farads.iter().copied().fold(f64::NAN, f64::min);
    if farads.len() < 2 {
        1.0
    } else {
        max / min
    }
}

/// The FDNR image's DC gain against the ladder's, the DC-path resistors
/// that hold it, and how far they move the response below the balance
/// frequency (ideal op-amps, so only their effect shows).
fn dc_path_notes(
    passive: &Netlist,
    plan: &Plan,
    tuning: &Tuning,
    (active, stages): (&Netlist, &[Stage]),
    balance_hz: f64,
) -> Result<Vec<Note>, ActiveError> {
    let dc = |n: &Netlist| -> Result<f64, ActiveError> {
        let h = refine::transfer(n, &[0.0])?;
        Ok(20.0 * h[0].norm().log10())
    };
    let resistors: Vec<DcPathResistor> = stages
        .iter()
        .filter_map(|s| match s.handles {
            Handles::Termination { dc_path, .. } => {
                let e = &active.elements[dc_path];
                Some(DcPathResistor {
                    designator: e.name().to_string(),
                    ohm: e.value()?,
                })
            }
            _ => None,
        })
        .collect();
    let ideal = plan.assemble(tuning, OpAmpModel::Ideal)?.0;
    let low_hz = balance_hz / DC_PATH_SPAN;
    let below = log_grid(low_hz, balance_hz, PASSBAND_POINTS)?;
    Ok(vec![
        Note::DcPath {
            dc_gain_db: dc(active)?,
            ladder_dc_gain_db: dc(passive)?,
            resistors,
        },
        Note::DcPathEffect {
            deviation_db: deviation_db(passive, &ideal, &below)?,
            from_hz: low_hz,
            to_hz: balance_hz,
        },
    ])
}

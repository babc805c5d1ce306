//! The pipeline: wires the stages in workflow order, plain data in and
//! plain data out.
//!
//! - [`design()`]: spec -> order and even-order variant -> approximation
//!   (or a prototype table) -> ladder -> transformed, scaled netlist ->
//!   the impedance level of the ladder's own parts: the passive ideal
//!   ([`Design`]).
//! - [`Design::active`] (in `builds`): the active exact build (every
//!   inductor replaced) and the active on parts build (preferred values,
//!   trimmed), each compared with the passive ideal ([`ActiveDesign`]).
//! - [`Design::analyses`] and the single analyses beside it (in
//!   `analyses`): sensitivities, op-amp levels, Monte Carlo yield, chart
//!   traces, each callable alone.
//! - [`Design::report`] (in `report`): everything above as one plain,
//!   serializable [`Report`], which `crate::export` renders.
//!
//! Neither the command line nor any stage needs to know the whole chain.

use crate::active::{self, ActiveError};
use crate::analysis::{passband_level_db, AnalysisError, DelayLimit, Limit};
use crate::approx::{self, ApproxError, Family, Params, Prototype};
use crate::circuit::{CircuitError, Netlist, OpAmpModel};
use crate::realize::{ladder_level, LadderLevel, PartsSnapError};
use crate::spec::table::PrototypeTable;
use crate::spec::{DelaySpec, PrototypeSource, Spec, SpecError, SpreadBound};
use crate::synth::{self, Form, Ladder, SynthError};
use crate::transform::{passive_netlist, Band, Kind, MaskField, MaskProblem};
use std::path::PathBuf;

mod analyses;
mod builds;
mod dynamics;
mod order;
mod report;
mod search;

pub use analyses::{
    default_trials, Analyses, BuildTrace, ChartTraces, DelayFigures, PartClass, TolerancePayoff,
    DEFAULT_TRIALS, DEFAULT_TRIALS_OPAMPS, MIN_DEFAULT_TRIALS, MONTE_CARLO_POINTS,
    SENSITIVITY_POINTS, WORST_TRIALS,
};
pub use builds::{ActiveDesign, BuildFigures, TopOfRange};
pub use dynamics::{
    BuildNoise, Contribution, DynamicRange, Headroom, LevelsGain, NoiseChart, NoiseFigures,
    StepChart, StepReport, NOISE_CHART_POINTS, STEP_CHART_POINTS, TOP_CONTRIBUTORS,
};
pub use order::{order_table, OrderRow, OrderTable};
pub use report::{
    interval_95, ActiveReport, BeforeTuning, Documents, NormalizedElement, Outcome, Report,
    ScaledElement,
};
pub use search::{
    design_for_yield, Candidate, CandidateResult, SearchProgress, ToleranceChange, YieldSearch,
};

/// The three builds of a design, named so wherever a figure is shown.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Build {
    /// The doubly terminated LC ladder, transformed and scaled.
    PassiveIdeal,
    /// Every inductor replaced by converters with exact values.
    ActiveExact,
    /// The active exact build on preferred values, trimmed: what is
    /// soldered.
    ActiveOnParts,
}

impl std::fmt::Display for Build {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Build::PassiveIdeal => "passive ideal",
            Build::ActiveExact => "active exact",
            Build::ActiveOnParts => "active on parts",
        })
    }
}

/// Where the normalized lowpass prototype came from.
#[derive(Debug, Clone)]
pub enum Origin {
    /// Computed from an approximation family.
    Family(Prototype),
    /// Read from a prototype table.
    Table(PrototypeTable),
}

/// How the order was fixed.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "how", rename_all = "snake_case")]
pub enum OrderChoice {
    /// Written in the design file.
    Given,
    /// The minimum for the mask.
    Computed {
        /// The minimum order of the standard approximation.
        minimum: usize,
        /// Whether the even-order form the terminations need missed the
        /// mask at `minimum`, so one more order was taken.
        raised_for_form: bool,
        /// Orders added beyond that so the passive ideal keeps the
        /// `[delay]` spread (0 without one).
        raised_for_delay: usize,
    },
    /// Fixed by a prototype table.
    Table,
    /// Chosen by the design for yield's search, at or above `minimum`,
    /// the order [`design`] takes for the specification.
    ForYield {
        /// The order the specification alone asks for.
        minimum: usize,
    },
}

/// What the ladder is synthesized for inside the specification: the
/// internal margins a design for yield chooses, so that boards whose
/// parts stray still meet the specification.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Margins {
    /// How much less passband ripple (for the all-pole families without
    /// ripple, loss at the edge) the prototype has than the
    /// specification allows, dB.
    pub passband_ripple_db: f64,
    /// How much more stopband attenuation the prototype is synthesized
    /// for than the specification asks (the families with finite
    /// transmission zeros, whose attenuation is a parameter), dB.
    pub stopband_attenuation_db: f64,
    /// The normalized frequency the prototype's passband edge is put at
    /// (1: on the specification's edge; above 1 the passband is
    /// pre-widened and the transition pulled in toward the stopband
    /// edge).
    pub edge_scale: f64,
}

impl Margins {
    /// The ladder synthesized for the specification itself.
    pub const NONE: Margins = Margins {
        passband_ripple_db: 0.0,
        stopband_attenuation_db: 0.0,
        edge_scale: 1.0,
    };
}

/// Where the surplus of a computed order goes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Margin {
    /// No stopband edge was given.
    NoStopband,
    /// A table prototype: the mask is not checked.
    Table,
    /// Elliptic: the attenuation is kept; surplus order moves the
    /// stopband edge closer to the passband.
    StopbandEdge,
    /// All-pole families: the stopband edge is kept; surplus order adds
    /// attenuation there.
    Attenuation,
}

/// What the mask looks like after the order was chosen, in the normalized
/// lowpass domain of the prototype.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct MaskCheck {
    /// Normalized stopband edge the mask asks for, rad/s, when given.
    pub required_stopband_edge_rad_s: Option<f64>,
    /// The prototype's gain there, dB (negative).
    pub gain_at_stopband_edge_db: Option<f64>,
    /// Where the prototype first reaches the stopband attenuation
    /// (elliptic), normalized rad/s.
    pub realized_stopband_edge_rad_s: Option<f64>,
    /// Where the surplus order went.
    pub margin: Margin,
    /// Whether the stopband attenuation is reached at the stopband edge
    /// (`None` without a stopband edge or attenuation). A given order can
    /// miss the mask; the summary warns.
    pub meets_mask: Option<bool>,
}

/// A finished passive design.
#[derive(Debug, Clone)]
pub struct Design {
    /// The validated specification.
    pub spec: Spec,
    /// The approximation or the table the ladder came from.
    pub origin: Origin,
    /// How the order was fixed.
    pub order_choice: OrderChoice,
    /// The mask after the order was chosen.
    pub mask: MaskCheck,
    /// The normalized ladder (1 ohm source, 1 rad/s edge).
    pub ladder: Ladder,
    /// The margins inside the specification the ladder was synthesized
    /// with ([`Margins::NONE`] unless a design for yield chose them).
    pub margins: Margins,
    /// How the order and the margins were chosen, when the design file
    /// asks for a yield (`[yield]`).
    pub yield_search: Option<YieldSearch>,
    /// The impedance level of the passive ideal: the terminations used
    /// and what they do to the parts the build keeps from the ladder.
    pub level: LadderLevel,
    /// The passive ideal, scaled to the terminations of `level`.
    pub passive: Netlist,
}

/// Whose fault a failure is, which decides the exit status of the
/// command line: the user's input (2) or the program (1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Blame {
    /// The input asks for something that cannot be built or is malformed.
    Input,
    /// Something the program should have handled.
    Program,
}

/// Why a design could not be made.
///
/// The fields are named `cause`, not `source`: the message already
/// includes it, and the binary prints the chain.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum DesignError {
    /// The design file (or a table it names) is wrong.
    #[error(transparent)]
    Spec(#[from] SpecError),
    /// The approximation refused the parameters.
    #[error("{}: {cause}", file.display())]
    Approx {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: ApproxError,
    },
    /// The netlist could not be built or solved.
    #[error("{}: {cause}", file.display())]
    Circuit {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: CircuitError,
    },
    /// The inductors could not be removed as asked (a method that cannot
    /// serve this ladder, an unstable network).
    #[error("{}: {cause}", file.display())]
    Active {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: ActiveError,
    },
    /// The build cannot be made of the parts asked for (a capacitor range
    /// no impedance level meets, ...).
    #[error("{}: {cause}", file.display())]
    Parts {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: PartsSnapError,
    },
    /// An analysis of a built network failed.
    #[error("{}: {cause}", file.display())]
    Analysis {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: AnalysisError,
    },
    /// No order up to the synthesis limit keeps the `[delay]` spread.
    #[error("{}: no {family} order up to {max} keeps the group delay spread of the [delay] table (the smallest reached is {best_spread_s:e} s); the Bessel family has the flattest delay, and a narrower delay.band_hz or a larger spread is easier to meet", file.display())]
    DelayBeyondMaxOrder {
        /// The design file.
        file: PathBuf,
        /// The family.
        family: Family,
        /// The highest order tried.
        max: usize,
        /// The smallest spread any order reached, seconds.
        best_spread_s: f64,
    },
    /// The inverse Chebyshev of this order and floor has no ladder with
    /// positive elements.
    #[error("{}: no {family} ladder of order {order} with a {attenuation_db} dB stopband floor has positive elements (the first partial removal of a zero comes out negative in every order of removal); a deeper floor allows higher orders (measured, every order up to: 4 at 20 dB, 6 at 40 dB, 10 at 60 dB, 14 at 100 dB), a lower order a shallower one, and the elliptic family meets the same mask at a lower order", file.display())]
    NoLadder {
        /// The design file.
        file: PathBuf,
        /// The family.
        family: Family,
        /// The order.
        order: usize,
        /// The stopband floor, dB.
        attenuation_db: f64,
    },
    /// Synthesis could not hold its accuracy for this approximation.
    #[error("{}: the ladder synthesis could not hold its accuracy for this design ({cause}); a lower order, a wider transition band or terminations closer to equal will do", file.display())]
    Synth {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: SynthError,
    },
}

impl DesignError {
    /// Whose fault it is, decided from the innermost error: a method that
    /// cannot serve the ladder, an unstable build, parts that cannot meet
    /// the range are the input's; a singular matrix or a broken contract
    /// between stages is the program's.
    pub fn blame(&self) -> Blame {
        let input = match self {
            DesignError::Spec(_)
            | DesignError::Approx { .. }
            | DesignError::Synth { .. }
            | DesignError::NoLadder { .. }
            | DesignError::DelayBeyondMaxOrder { .. } => true,
            DesignError::Circuit { .. } | DesignError::Analysis { .. } => false,
            DesignError::Active { cause, .. } => matches!(
                cause,
                ActiveError::NotApplicable { .. }
                    | ActiveError::Unstable { .. }
                    | ActiveError::TooSlow { .. }
                    | ActiveError::DcPath { .. }
            ),
            DesignError::Parts { cause, .. } => cause.is_bad_input(),
        };
        if input {
            Blame::Input
        } else {
            Blame::Program
        }
    }

    /// Whether the problem is in the user's input (exit status 2) rather
    /// than in the program.
    pub fn is_bad_input(&self) -> bool {
        self.blame() == Blame::Input
    }
}

/// Runs the pipeline up to the passive ideal, the ladder synthesized for
/// the specification itself.
pub fn design(spec: &Spec) -> Result<Design, DesignError> {
    design_for(spec, None, Margins::NONE)
}

/// A ladder of a chosen order, within the design for yield's search.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct SearchOrder {
    /// The order to synthesize.
    pub order: usize,
    /// The order [`design`] chooses for the specification.
    pub minimum: usize,
}

/// The pipeline up to the passive ideal, the ladder synthesized with
/// `margins` inside the specification, at the `searched` order when
/// given.
pub(crate) fn design_for(
    spec: &Spec,
    searched: Option<SearchOrder>,
    margins: Margins,
) -> Result<Design, DesignError> {
    let ratio = spec.load_ohm / spec.source_ohm;
    let ws = spec.band.normalized_stopband();
    let file = || spec.file.clone();
    let (origin, order_choice, ladder) = match &spec.prototype {
        PrototypeSource::Family {
            family,
            order,
            passband_ripple_db,
            stopband_attenuation_db,
        } => {
            let attenuation =
                stopband_attenuation_db.unwrap_or(0.0) + margins.stopband_attenuation_db;
            let passband_ripple_db = &(passband_ripple_db - margins.passband_ripple_db);
            let ask = match (searched, order, ws) {
                (Some(s), _, _) => OrderAsk::Searched(s),
                (None, Some(n), _) => OrderAsk::Given(*n),
                (None, None, Some(ws)) => OrderAsk::ForMask(ws),
                (None, None, None) => {
                    return Err(SpecError::Invalid {
                        file: file(),
                        key: "filter.order",
                        got: "(missing)".to_string(),
                        expected: "expected an order, or filter.stopband_edge_hz to compute it"
                            .to_string(),
                    }
                    .into())
                }
            };
            let (proto, how) =
                choose_prototype(*family, ask, *passband_ripple_db, attenuation, ratio).map_err(
                    |cause| DesignError::Approx {
                        file: file(),
                        cause,
                    },
                )?;
            let (proto, how) = raise_for_delay(spec, proto, how, ratio)?;
            check_synthesis_limit(spec, &proto)?;
            let ladder = ladder(spec, &proto, ratio)?;
            (Origin::Family(proto), how, ladder)
        }
        PrototypeSource::Table { path } => {
            let table = PrototypeTable::load(path).map_err(|e| match e {
                // The table the design file names cannot be read: say so
                // under the design file's key.
                SpecError::Read { file: table, cause } => SpecError::Invalid {
                    file: spec.file.clone(),
                    key: "filter.prototype",
                    got: table.display().to_string(),
                    expected: format!(
                        "expected a prototype table file (path relative to the design file's folder), but it cannot be read: {cause}"
                    ),
                },
                other => other,
            })?;
            let ladder = Ladder::from_arms(table.arms.iter().copied(), table.load_ohm);
            (Origin::Table(table), OrderChoice::Table, ladder)
        }
    };
    let mask = mask_check(&origin, ws, stopband_attenuation(spec), margins.edge_scale);
    let title = format!("nocoil passive ideal: {}", spec.file.display());
    let built = ladder.with_edge_at(margins.edge_scale);
    let scaled = |source_ohm: f64| {
        passive_netlist(&built, spec.band, source_ohm, &title).map_err(|cause| {
            DesignError::Circuit {
                file: file(),
                cause,
            }
        })
    };
    let given = scaled(spec.source_ohm)?;
    // The level is chosen for the parts the build will keep from the
    // ladder, so the build's method is decided here already.
    let kept =
        active::kept_elements(&given, spec.active.method).map_err(|cause| DesignError::Active {
            file: file(),
            cause,
        })?;
    let level = ladder_level(
        &given,
        &kept,
        (spec.source_ohm, spec.load_ohm),
        &spec.parts,
        spec.level,
    )
    .map_err(|cause| DesignError::Parts {
        file: file(),
        cause,
    })?;
    let passive = if level.factor == 1.0 {
        given
    } else {
        scaled(level.source_ohm)?
    };
    Ok(Design {
        spec: spec.clone(),
        origin,
        order_choice,
        mask,
        ladder,
        margins,
        yield_search: None,
        level,
        passive,
    })
}

/// A computed order beyond what the synthesis holds (see
/// [`synth::max_order`]) is refused up front, naming the stopband edge
/// that asked for it (a given order beyond it is refused when the file is
/// read).
fn check_synthesis_limit(spec: &Spec, proto: &Prototype) -> Result<(), DesignError> {
    let (n, max) = (proto.params.order, synth::max_order(proto.params.family));
    if n <= max {
        return Ok(());
    }
    Err(SpecError::Invalid {
        file: spec.file.clone(),
        key: "filter.stopband_edge_hz",
        got: format!("(needs order {n})"),
        expected: format!(
            "expected a mask that an order of {max} or less meets (the highest order to which {} ladders are synthesized accurately): move the stopband edge away from the passband, lower the attenuation or raise the ripple",
            proto.params.family
        ),
    }
    .into())
}

/// The ladder in the form asked for. Without a form in the design file,
/// an even order whose terminations fit only the other orientation takes
/// the other form; with one, that is the user's to change.
fn ladder(spec: &Spec, proto: &Prototype, ratio: f64) -> Result<Ladder, DesignError> {
    let synth_error = |cause| match cause {
        // Measured in tests/families.rs: a property of the inverse
        // Chebyshev's shallow floors, not of the synthesis' accuracy.
        SynthError::NoZeroOrder { .. } if proto.params.family == Family::InverseChebyshev => {
            DesignError::NoLadder {
                file: spec.file.clone(),
                family: proto.params.family,
                order: proto.params.order,
                attenuation_db: proto.params.stopband_attenuation_db,
            }
        }
        cause => DesignError::Synth {
            file: spec.file.clone(),
            cause,
        },
    };
    // The default: the capacitors sit in shunt arms that end at ground,
    // which is what the inductorless realizations want.
    let asked = spec.form.unwrap_or(Form::MinCapacitor);
    match (synth::synthesize(proto, ratio, asked), spec.form) {
        (Err(SynthError::EvenOrderOrientation { .. }), None) => {
            synth::synthesize(proto, ratio, Form::MinInductor).map_err(synth_error)
        }
        (Err(cause @ SynthError::EvenOrderOrientation { .. }), Some(asked)) => {
            Err(SpecError::Invalid {
                file: spec.file.clone(),
                key: "filter.form",
                got: crate::spec::as_written(&asked),
                expected: format!("expected the other form for these terminations ({cause})"),
            }
            .into())
        }
        (result, _) => result.map_err(synth_error),
    }
}

/// How the order is asked for.
enum OrderAsk {
    /// Given in the design file.
    Given(usize),
    /// Chosen by the design for yield's search.
    Searched(SearchOrder),
    /// The minimum for the normalized stopband edge (rad/s).
    ForMask(f64),
}

/// Picks order and even-order variant. With a computed order, the
/// variant the terminations force may miss the mask (the modified forms
/// are slightly less selective); then one more order is taken.
fn choose_prototype(
    family: Family,
    ask: OrderAsk,
    ripple_db: f64,
    attenuation_db: f64,
    ratio: f64,
) -> Result<(Prototype, OrderChoice), ApproxError> {
    let build = |n: usize| prototype_at(family, n, ripple_db, attenuation_db, ratio);
    let ws = match ask {
        OrderAsk::Given(n) => return Ok((build(n)?, OrderChoice::Given)),
        OrderAsk::Searched(SearchOrder { order, minimum }) => {
            return Ok((build(order)?, OrderChoice::ForYield { minimum }))
        }
        OrderAsk::ForMask(ws) => ws,
    };
    let minimum = approx::min_order(family, ws, ripple_db, attenuation_db)?;
    let proto = build(minimum)?;
    let raised_for_form = !meets_stopband(&proto, ws, attenuation_db);
    let proto = if raised_for_form {
        build(minimum + 1)?
    } else {
        proto
    };
    Ok((
        proto,
        OrderChoice::Computed {
            minimum,
            raised_for_form,
            raised_for_delay: 0,
        },
    ))
}

/// The prototype of order `n` in the even-order variant the termination
/// ratio can realize.
fn prototype_at(
    family: Family,
    n: usize,
    ripple_db: f64,
    attenuation_db: f64,
    ratio: f64,
) -> Result<Prototype, ApproxError> {
    let eps = (ripple_db * std::f64::consts::LN_10 / 10.0).exp_m1().sqrt();
    Prototype::new(Params {
        family,
        order: n,
        passband_ripple_db: ripple_db,
        stopband_attenuation_db: attenuation_db,
        variant: synth::variant_for(family, n, eps, ratio),
    })
}

/// The bands a `[delay]` specification holds over: its own, or the
/// passbands within the specification's view.
pub(crate) fn delay_bands(spec: &Spec, delay: &DelaySpec) -> Vec<[f64; 2]> {
    delay
        .bands_hz
        .clone()
        .unwrap_or_else(|| spec.band.passbands_hz(spec.band.view_hz()))
}

/// A computed order raised, one at a time, until the prototype's group
/// delay (exact, from its poles, carried to real frequencies by the
/// kind's transformation) keeps the `[delay]` spread; a given order is
/// kept as written (the verdicts then say how it fares).
fn raise_for_delay(
    spec: &Spec,
    proto: Prototype,
    how: OrderChoice,
    ratio: f64,
) -> Result<(Prototype, OrderChoice), DesignError> {
    let (
        Some(delay),
        &OrderChoice::Computed {
            minimum,
            raised_for_form,
            ..
        },
    ) = (&spec.delay, &how)
    else {
        return Ok((proto, how));
    };
    let limit =
        DelayLimit::new(delay_bands(spec, delay), 1.0).map_err(|cause| DesignError::Analysis {
            file: spec.file.clone(),
            cause,
        })?;
    let grid = limit.grid();
    let keeps = |p: &Prototype| {
        let delays: Vec<f64> = grid
            .iter()
            .map(|&f| p.group_delay(spec.band.normalized(f)) * spec.band.delay_factor_s(f))
            .collect();
        let v = limit.verdict(&grid, &delays);
        let bound = match delay.bound {
            SpreadBound::Seconds(s) => s,
            SpreadBound::Percent(pct) => v.longest_s * pct / 100.0,
        };
        (v.spread_s <= bound, v.spread_s)
    };
    let family = proto.params.family;
    let mut best = f64::INFINITY;
    for order in proto.params.order..=synth::max_order(family) {
        let candidate = if order == proto.params.order {
            proto.clone()
        } else {
            let p = &proto.params;
            prototype_at(
                family,
                order,
                p.passband_ripple_db,
                p.stopband_attenuation_db,
                ratio,
            )
            .map_err(|cause| DesignError::Approx {
                file: spec.file.clone(),
                cause,
            })?
        };
        let (ok, spread) = keeps(&candidate);
        if ok {
            let raised = order - proto.params.order;
            return Ok((
                candidate,
                OrderChoice::Computed {
                    minimum,
                    raised_for_form,
                    raised_for_delay: raised,
                },
            ));
        }
        best = best.min(spread);
    }
    Err(DesignError::DelayBeyondMaxOrder {
        file: spec.file.clone(),
        family,
        max: synth::max_order(family),
        best_spread_s: best,
    })
}

/// How far below the view a lowpass passband is judged, a factor: an
/// FDNR build's DC-path resistors and termination capacitors set its
/// gain below about wb / K (K the DC-path factor, at most
/// [`active::DEFAULT_DC_PATH_FACTOR`], so at least 1e-4 of the balance
/// frequency, 1e-3 of the view's low end a decade below the passband
/// edge) by the resistors' ratio, and above it by the capacitors': a step
/// where their tolerances differ (0.21 dB from a 5 % capacitor mismatch,
/// tests/design.rs), finished a decade below that corner.
pub const DC_REACH: f64 = 1e5;

/// The top of the op-amp range as a fraction of the gain-bandwidth: a
/// highpass or bandstop passband is open above, and its active builds
/// depart from the passive ideal as the converters' value error, about
/// 4 w / wt for a balanced Antoniou converter (a first-order analysis,
/// 4e-3 measured at GBW / f = 1000 in src/active/refine.rs), grows to
/// 40 % at GBW / 10; no build holds a passband beyond it, so that is
/// where nocoil stops checking and says what is left there (a choice of
/// the project).
pub const TOP_OF_RANGE: f64 = 0.1;

/// Allowed shortfall of the attenuation at the stopband edge, and slack
/// of every mask limit, dB: the standard approximation at its minimum
/// order meets the mask exactly up to rounding of the order formula's
/// inputs, and an equiripple response touches its ripple limit exactly at
/// each ripple minimum; rounding must not turn either into a failure. Far
/// below anything a measurement resolves.
pub const MASK_SLACK_DB: f64 = 1e-6;

fn meets_stopband(proto: &Prototype, ws: f64, attenuation_db: f64) -> bool {
    proto.attenuation_db(ws) >= attenuation_db - MASK_SLACK_DB
}

/// The mask against a prototype whose edge is put at `edge_scale`.
fn mask_check(
    origin: &Origin,
    ws: Option<f64>,
    attenuation_db: Option<f64>,
    edge_scale: f64,
) -> MaskCheck {
    let proto = match origin {
        Origin::Family(p) => Some(p),
        Origin::Table(_) => None,
    };
    let attenuation = proto.zip(ws).map(|(p, w)| p.attenuation_db(w / edge_scale));
    let meets_mask = attenuation
        .zip(attenuation_db)
        .map(|(got, asked)| got >= asked - MASK_SLACK_DB);
    let margin = match (proto.map(|p| p.params.family), ws) {
        (_, None) => Margin::NoStopband,
        (None, Some(_)) => Margin::Table,
        (Some(family), Some(_)) if family.finite_zeros() => Margin::StopbandEdge,
        (Some(_), Some(_)) => Margin::Attenuation,
    };
    MaskCheck {
        required_stopband_edge_rad_s: ws,
        gain_at_stopband_edge_db: attenuation.map(|a| -a),
        realized_stopband_edge_rad_s: proto.and_then(|p| p.stopband_edge).map(|w| w * edge_scale),
        margin,
        meets_mask,
    }
}

/// The stopband attenuation the design file asks for.
fn stopband_attenuation(spec: &Spec) -> Option<f64> {
    match spec.prototype {
        PrototypeSource::Family {
            stopband_attenuation_db,
            ..
        } => stopband_attenuation_db,
        PrototypeSource::Table { .. } => None,
    }
}

impl Design {
    /// The frequency range worth looking at, Hz (see [`Band::view_hz`]).
    pub fn view_hz(&self) -> (f64, f64) {
        let (lo, hi) = self.spec.band.view_hz();
        (lo, hi.max(self.top_of_range_hz().unwrap_or(hi)))
    }

    /// How far up a highpass or bandstop passband is checked, plotted and
    /// reported: [`TOP_OF_RANGE`] times the op-amps' gain-bandwidth (or
    /// their second pole, when that lies below it: the gain falls twice as
    /// fast above it, and a view to a tenth of a 1e12 Hz GBW over a 47 MHz
    /// second pole reached frequencies where the network's equations are
    /// singular in a double, found by the generative test), when that lies
    /// above the band's own view; `None` for the other kinds, for ideal
    /// op-amps, or when the view already reaches it.
    pub fn top_of_range_hz(&self) -> Option<f64> {
        let open_above = matches!(
            self.spec.band,
            Band::Highpass { .. } | Band::Bandstop { .. }
        );
        let model = self.spec.opamp.model;
        let corner_hz = match model {
            OpAmpModel::TwoPole {
                gbw_hz,
                second_pole_hz,
                ..
            } => gbw_hz.min(second_pole_hz),
            _ => model.gbw_hz()?,
        };
        let top = TOP_OF_RANGE * corner_hz;
        (open_above && top > self.spec.band.view_hz().1).then_some(top)
    }

    /// The passbands within the view, Hz; a passband reaching the top of
    /// the op-amp range is split at the band's own view, so the decade
    /// next to the edge keeps its own grid of points.
    pub fn passbands_hz(&self) -> Vec<[f64; 2]> {
        let (lo, hi) = self.spec.band.view_hz();
        let mut bands = self.spec.band.passbands_hz((lo, hi));
        if let Some(top) = self.top_of_range_hz() {
            // From its own grid's first step above the view's top, so no
            // frequency is listed twice.
            let step = (top / hi).powf(1.0 / active::PASSBAND_POINTS as f64);
            bands.push([hi * step, top]);
        }
        bands
    }

    /// The passband level: the terminations' divider, dB.
    pub fn passband_level_db(&self) -> f64 {
        passband_level_db(self.spec.source_ohm, self.spec.load_ohm)
    }

    /// The prototype, when the design was computed from a family.
    pub fn prototype(&self) -> Option<&Prototype> {
        match &self.origin {
            Origin::Family(p) => Some(p),
            Origin::Table(_) => None,
        }
    }

    /// The passband ripple the specification allows (Butterworth: loss
    /// at the edge), dB; the prototype's own is this less
    /// [`Design::margins`].
    pub fn passband_ripple_db(&self) -> f64 {
        match (&self.spec.prototype, &self.origin) {
            (
                PrototypeSource::Family {
                    passband_ripple_db, ..
                },
                _,
            ) => *passband_ripple_db,
            (_, Origin::Table(t)) => t.passband_ripple_db,
            (_, Origin::Family(p)) => p.params.passband_ripple_db,
        }
    }

    /// The stopband attenuation the design file or table asks for, dB.
    pub fn stopband_attenuation_db(&self) -> Option<f64> {
        match &self.origin {
            Origin::Family(_) => stopband_attenuation(&self.spec),
            Origin::Table(t) => t.stopband_attenuation_db,
        }
    }

    /// The specification as absolute gain limits, dB: across each
    /// passband no lower than the level less the ripple, across each
    /// stopband no higher than the level less the attenuation. Above the
    /// level there is no limit: a gain a hair above the divider is not a
    /// failure of the specification. The verdicts and the charts use it.
    pub fn mask_limits(&self) -> Vec<Limit> {
        self.limits(0.0, 0.0)
    }

    /// The limits a Monte Carlo board must keep: the specification
    /// tightened by the design file's `[montecarlo]` margins.
    pub fn yield_limits(&self) -> Vec<Limit> {
        let mc = &self.spec.montecarlo;
        self.limits(mc.passband_margin_db, mc.stopband_margin_db)
    }

    /// Where the passband of a lowpass built as an FDNR image, which
    /// reaches DC through its DC-path resistors, is judged from below the
    /// view: [`DC_REACH`] times lower; `None` for the other builds.
    pub fn dc_reach_hz(&self) -> Option<f64> {
        let fdnr = active::uses_fdnr(&self.passive, self.spec.active.method);
        (matches!(self.spec.band, Band::Lowpass { .. }) && fdnr.unwrap_or(false))
            .then(|| self.view_hz().0 / DC_REACH)
    }

    /// The specification's limits tightened by these margins, dB.
    fn limits(&self, passband_margin_db: f64, stopband_margin_db: f64) -> Vec<Limit> {
        let view = self.view_hz();
        let level = self.passband_level_db();
        let ripple = self.passband_ripple_db();
        let judged = (self.dc_reach_hz().unwrap_or(view.0), view.1);
        let mut limits: Vec<Limit> = self
            .spec
            .band
            .passbands_hz(judged)
            .into_iter()
            .map(|[from_hz, to_hz]| Limit {
                from_hz,
                to_hz,
                min_db: level - ripple + passband_margin_db - MASK_SLACK_DB,
                max_db: f64::INFINITY,
            })
            .collect();
        // A table's attenuation describes the table, not the mask: only a
        // design file's asks the board to meet it.
        if let Some(att) = stopband_attenuation(&self.spec) {
            limits.extend(
                self.spec
                    .band
                    .stopbands_hz(view)
                    .into_iter()
                    .map(|[from_hz, to_hz]| Limit {
                        from_hz,
                        to_hz,
                        min_db: f64::NEG_INFINITY,
                        max_db: level - att - stopband_margin_db + MASK_SLACK_DB,
                    }),
            );
        }
        limits
    }
}

/// Checks a mask given by command-line flags, as [`Band::new`] and
/// [`crate::transform::check_levels`] do for a design file.
pub fn mask_band(
    kind: Kind,
    passband_hz: &[f64],
    stopband_hz: &[f64],
    ripple_db: f64,
    attenuation_db: f64,
) -> Result<Band, MaskProblem> {
    let band = Band::new(kind, passband_hz, Some(stopband_hz))?;
    crate::transform::check_levels(ripple_db, Some(attenuation_db))?;
    if band.normalized_stopband().is_none_or(|w| !w.is_finite()) {
        return Err(MaskProblem {
            field: MaskField::Stopband,
            got: format!("{stopband_hz:?}"),
            expected: "expected a stopband edge a finite distance from the passband".to_string(),
        });
    }
    Ok(band)
}

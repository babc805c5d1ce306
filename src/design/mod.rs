//! The pipeline: wires the stages in workflow order, from a validated
//! [`Spec`] to the passive ideal.
//!
//! spec -> mask in the normalized lowpass domain -> order and variant ->
//! approximation -> ladder -> transformed, scaled netlist. Neither the CLI
//! nor any stage needs to know the whole chain.

use crate::active::ActiveError;
use crate::analysis::AnalysisError;
use crate::approx::{self, ApproxError, Family, Params, Prototype};
use crate::circuit::{AcSystem, CircuitError, Netlist, Response};
use crate::spec::table::{PrototypeTable, TableArm};
use crate::spec::{Edge, FamilyChoice, FormChoice, Kind, PrototypeSource, Spec, SpecError};
use crate::synth::{self, ArmValues, Form, Ladder, SynthError};
use crate::transform::{passive_netlist, Mapping};
use std::path::PathBuf;

mod active;
mod documents;
mod outputs;
mod parts;
pub use documents::{levels_csv, sensitivity_csv, Analyses, CAUTIONS};
mod report;
mod sweep;
mod yields;
pub use active::{opamp_model, passbands, ActiveDesign, Comparison};
pub use outputs::{OutputFile, DECK_POINTS_PER_DECADE};
pub use parts::{
    snap_build, ErrorSteps, PartsChoice, PartsSnapError, SnappedBuild, Trim, TRIMMER_SERIES,
};
pub use report::{NormalizedElement, Report, ScaledElement};
pub use sweep::SWEEP_COLUMNS;
pub use yields::{envelope_csv, series, yield_summary, MONTE_CARLO_POINTS, WORST_TRIALS};

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
    },
    /// Fixed by a prototype table.
    Table,
}

/// What the mask looks like after the order was chosen.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct MaskCheck {
    /// Normalized stopband edge the mask asks for (rad/s), when given.
    pub required_stopband_edge: Option<f64>,
    /// Attenuation the approximation reaches there, dB.
    pub attenuation_at_stopband_edge_db: Option<f64>,
    /// Where the approximation first reaches the stopband attenuation
    /// (elliptic), normalized rad/s.
    pub realized_stopband_edge: Option<f64>,
    /// Which margin the surplus order went to, in words.
    pub margin: String,
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
    /// The approximation, when computed from a family.
    pub prototype: Option<Prototype>,
    /// The table, when read from one.
    pub table: Option<PrototypeTable>,
    /// How the order was fixed.
    pub order_choice: OrderChoice,
    /// The mask after the order was chosen.
    pub mask: MaskCheck,
    /// The normalized ladder (1 ohm source, 1 rad/s edge).
    pub ladder: Ladder,
    /// The frequency transformation applied.
    pub mapping: Mapping,
    /// The passive ideal, scaled.
    pub passive: Netlist,
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
    /// The netlist could not be built or solved (a program fault).
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
    /// An analysis of a built network failed (a program fault).
    #[error("{}: {cause}", file.display())]
    Analysis {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: AnalysisError,
    },
    /// An output could not be rendered (a program fault).
    #[error("{}: writing the outputs: {cause}", file.display())]
    Export {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: String,
    },
    /// Synthesis could not hold its accuracy for this approximation.
    #[error("{}: the ladder synthesis could not hold its accuracy for this design; a lower order or a wider transition band will do ({cause})", file.display())]
    Synth {
        /// The design file.
        file: PathBuf,
        /// Why.
        cause: SynthError,
    },
}

impl DesignError {
    /// Whether the problem is in the user's input (exit status 2) rather
    /// than in the program.
    pub fn is_bad_input(&self) -> bool {
        !matches!(
            self,
            DesignError::Circuit { .. } | DesignError::Analysis { .. } | DesignError::Export { .. }
        )
    }
}

/// The frequency transformation a spec asks for.
pub fn mapping(kind: Kind, passband: Edge) -> Mapping {
    match (kind, passband) {
        (Kind::Lowpass, Edge::Single(f)) => Mapping::Lowpass(f),
        (Kind::Highpass, Edge::Single(f)) => Mapping::Highpass(f),
        (Kind::Bandpass, Edge::Pair(a, b)) => Mapping::Bandpass(a, b),
        (Kind::Bandstop, Edge::Pair(a, b)) => Mapping::Bandstop(a, b),
        // Spec validation guarantees the edge shape matches the kind.
        (kind, edge) => unreachable!("edge {edge:?} does not fit {kind:?}"),
    }
}

/// The normalized lowpass stopband edge a mask asks for: the nearer of the
/// two transformed edges for band kinds.
pub fn normalized_stopband(mapping: Mapping, stop: Edge) -> f64 {
    match stop {
        Edge::Single(f) => mapping.normalized(f),
        Edge::Pair(a, b) => mapping.normalized(a).min(mapping.normalized(b)),
    }
}

/// The approximation family for a design-file family.
pub fn family(choice: FamilyChoice) -> Family {
    match choice {
        FamilyChoice::Butterworth => Family::Butterworth,
        FamilyChoice::Chebyshev => Family::Chebyshev,
        FamilyChoice::Elliptic => Family::Elliptic,
    }
}

fn form(choice: Option<FormChoice>) -> Form {
    match choice {
        Some(FormChoice::MinInductor) => Form::MinInductor,
        // The default: the capacitors sit in shunt arms that end at
        // ground, which is what the inductorless realizations want.
        Some(FormChoice::MinCapacitor) | None => Form::MinCapacitor,
    }
}

/// Runs the pipeline up to the passive ideal.
pub fn design(spec: &Spec) -> Result<Design, DesignError> {
    let mapping = mapping(spec.kind, spec.passband_edge_hz);
    let ratio = spec.load_ohm / spec.source_ohm;
    let ws = spec
        .stopband_edge_hz
        .map(|s| normalized_stopband(mapping, s));
    let file = || spec.file.clone();
    let (prototype, table, order_choice, ladder) = match &spec.prototype {
        PrototypeSource::Family {
            family: choice,
            order,
            passband_ripple_db,
            stopband_attenuation_db,
        } => {
            let fam = family(*choice);
            let attenuation = stopband_attenuation_db.unwrap_or(0.0);
            let (proto, how) =
                choose_prototype(fam, *order, ws, *passband_ripple_db, attenuation, ratio)
                    .map_err(|cause| DesignError::Approx {
                        file: file(),
                        cause,
                    })?;
            check_synthesis_limit(spec, &proto)?;
            let ladder = ladder(spec, &proto, ratio)?;
            (Some(proto), None, how, ladder)
        }
        PrototypeSource::Table { path } => {
            let table = PrototypeTable::load(path)?;
            let ladder = table_ladder(&table);
            (None, Some(table), OrderChoice::Table, ladder)
        }
    };
    let mask = mask_check(prototype.as_ref(), ws, stopband_attenuation(spec));
    let title = format!("nocoil passive ideal: {}", spec.file.display());
    let passive = passive_netlist(&ladder, mapping, spec.source_ohm, &title).map_err(|cause| {
        DesignError::Circuit {
            file: file(),
            cause,
        }
    })?;
    Ok(Design {
        spec: spec.clone(),
        prototype,
        table,
        order_choice,
        mask,
        ladder,
        mapping,
        passive,
    })
}

/// Elliptic orders beyond [`synth::ELLIPTIC_MAX_ORDER`] are refused up
/// front, naming the key that set the order.
fn check_synthesis_limit(spec: &Spec, proto: &Prototype) -> Result<(), DesignError> {
    let n = proto.params.order;
    if proto.params.family != Family::Elliptic || n <= synth::ELLIPTIC_MAX_ORDER {
        return Ok(());
    }
    let given = matches!(
        spec.prototype,
        PrototypeSource::Family { order: Some(_), .. }
    );
    let (key, got) = if given {
        ("filter.order", n.to_string())
    } else {
        ("filter.stopband_edge_hz", format!("(needs order {n})"))
    };
    Err(SpecError::Invalid {
        file: spec.file.clone(),
        key,
        got,
        expected: format!(
            "expected an elliptic order of at most {} (the synthesis accuracy limit); relax the mask",
            synth::ELLIPTIC_MAX_ORDER
        ),
    }
    .into())
}

/// The ladder in the form asked for. Without a form in the design file,
/// an even order whose terminations fit only the other orientation takes
/// the other form; with one, that is the user's to change.
fn ladder(spec: &Spec, proto: &Prototype, ratio: f64) -> Result<Ladder, DesignError> {
    let synth_error = |cause| DesignError::Synth {
        file: spec.file.clone(),
        cause,
    };
    match (synth::synthesize(proto, ratio, form(spec.form)), spec.form) {
        (Err(SynthError::EvenOrderOrientation { .. }), None) => {
            synth::synthesize(proto, ratio, Form::MinInductor).map_err(synth_error)
        }
        (Err(cause @ SynthError::EvenOrderOrientation { .. }), Some(asked)) => {
            Err(SpecError::Invalid {
                file: spec.file.clone(),
                key: "filter.form",
                got: asked.as_str().to_string(),
                expected: format!("expected the other form for these terminations ({cause})"),
            }
            .into())
        }
        (result, _) => result.map_err(synth_error),
    }
}

/// Picks order and even-order variant. With a computed order, the
/// variant the terminations force may miss the mask (the modified forms
/// are slightly less selective); then one more order is taken.
fn choose_prototype(
    family: Family,
    order: Option<usize>,
    ws: Option<f64>,
    ripple_db: f64,
    attenuation_db: f64,
    ratio: f64,
) -> Result<(Prototype, OrderChoice), ApproxError> {
    let build = |n: usize| {
        let eps = (ripple_db * std::f64::consts::LN_10 / 10.0).exp_m1().sqrt();
        let variant = synth::variant_for(family, n, eps, ratio);
        Prototype::new(Params {
            family,
            order: n,
            passband_ripple_db: ripple_db,
            stopband_attenuation_db: attenuation_db,
            variant,
        })
    };
    match (order, ws) {
        (Some(n), _) => Ok((build(n)?, OrderChoice::Given)),
        (None, Some(ws)) => {
            let minimum = approx::min_order(family, ws, ripple_db, attenuation_db)?;
            let proto = build(minimum)?;
            if meets_stopband(&proto, ws, attenuation_db) {
                return Ok((
                    proto,
                    OrderChoice::Computed {
                        minimum,
                        raised_for_form: false,
                    },
                ));
            }
            Ok((
                build(minimum + 1)?,
                OrderChoice::Computed {
                    minimum,
                    raised_for_form: true,
                },
            ))
        }
        // Spec validation asks for an order or a stopband edge.
        (None, None) => unreachable!("validated spec has an order or a stopband edge"),
    }
}

/// Allowed shortfall of the attenuation at the stopband edge, dB: the
/// standard approximation at its minimum order meets the mask exactly up
/// to rounding of the order formula's inputs.
const MASK_TOLERANCE_DB: f64 = 1e-6;

fn meets_stopband(proto: &Prototype, ws: f64, attenuation_db: f64) -> bool {
    proto.attenuation_db(ws) >= attenuation_db - MASK_TOLERANCE_DB
}

fn mask_check(
    proto: Option<&Prototype>,
    ws: Option<f64>,
    attenuation_db: Option<f64>,
) -> MaskCheck {
    let attenuation = proto.zip(ws).map(|(p, w)| p.attenuation_db(w));
    let meets_mask = attenuation
        .zip(attenuation_db)
        .map(|(got, asked)| got >= asked - MASK_TOLERANCE_DB);
    let realized = proto.and_then(|p| p.stopband_edge);
    let margin = match (proto.map(|p| p.params.family), ws) {
        (_, None) => "no stopband edge given",
        (None, Some(_)) => "a table prototype: the mask is not checked",
        (Some(Family::Elliptic), Some(_)) => {
            "the stopband attenuation is kept; any surplus order moves the stopband edge closer to the passband"
        }
        (Some(_), Some(_)) => "the stopband edge is kept; any surplus order adds attenuation there",
    }
    .to_string();
    MaskCheck {
        required_stopband_edge: ws,
        attenuation_at_stopband_edge_db: attenuation,
        realized_stopband_edge: realized,
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

/// The ladder a table writes out arm by arm.
fn table_ladder(table: &PrototypeTable) -> Ladder {
    synth::Ladder::from_arms(
        table.arms.iter().map(|a| match *a {
            TableArm::SeriesL(l) => ArmValues::SeriesL(l),
            TableArm::ShuntC(c) => ArmValues::ShuntC(c),
            TableArm::SeriesTank(l, c) => ArmValues::SeriesTank(l, c),
            TableArm::ShuntResonator(l, c) => ArmValues::ShuntResonator(l, c),
        }),
        table.load_ohm,
    )
}

impl Design {
    /// The frequency band worth looking at: a decade below the lowest edge
    /// to a decade above the highest, Hz.
    pub fn default_band(&self) -> (f64, f64) {
        let edges = [Some(self.spec.passband_edge_hz), self.spec.stopband_edge_hz];
        let all = edges.iter().flatten().flat_map(|e| match *e {
            Edge::Single(f) => vec![f],
            Edge::Pair(a, b) => vec![a, b],
        });
        let (lo, hi) = all.fold((f64::INFINITY, 0.0_f64), |(lo, hi), f| {
            (lo.min(f), hi.max(f))
        });
        (lo / 10.0, hi * 10.0)
    }

    /// The passive ideal's V(out)/V(in) at each frequency.
    pub fn passive_response(&self, freqs_hz: &[f64]) -> Result<Response, CircuitError> {
        response(&self.passive, freqs_hz)
    }
}

/// Group delay of V(out)/V(in), seconds, at each frequency: exact up to
/// rounding (one extra solve per point, see [`AcSystem::group_delay`]),
/// so a transmission zero does not smear into the neighbouring points as a
/// difference quotient of the phase would. At a zero itself the delay is
/// undefined and comes out as NaN.
pub fn group_delay(netlist: &Netlist, freqs_hz: &[f64]) -> Result<Vec<f64>, CircuitError> {
    let (inp, out) = (netlist.require_node("in")?, netlist.require_node("out")?);
    let mut system = AcSystem::new(netlist)?;
    freqs_hz
        .iter()
        .map(|&f| match system.group_delay(f, out, inp) {
            Err(CircuitError::ZeroVoltage { .. }) => Ok(f64::NAN),
            other => other,
        })
        .collect()
}

/// V(out)/V(in) of a netlist that follows the project's contract (nodes
/// `in` and `out`).
pub fn response(netlist: &Netlist, freqs_hz: &[f64]) -> Result<Response, CircuitError> {
    let (inp, out) = (netlist.require_node("in")?, netlist.require_node("out")?);
    AcSystem::new(netlist)?.sweep(freqs_hz, out, inp)
}

//! What a finished design reports: a plain, serializable [`Report`] (the
//! JSON file, and the data every renderer of `crate::export` reads), and
//! [`Documents`], the report with the networks and analyses the charts,
//! decks and tables need.

use super::{
    ActiveDesign, Analyses, BuildFigures, DelayFigures, Design, MaskCheck, OrderChoice, Origin,
};
use crate::active::{CornerVerdict, Method, NaturalFrequency, Note, Stage, Why};
use crate::analysis::{Limit, MaskVerdict};
use crate::approx::{Family, Variant};
use crate::circuit::{Element, Netlist, OpAmpModel};
use crate::parts::PartsChoice;
use crate::realize::{ErrorSteps, LadderLevel, Rescale, Trim, TuningStep};
use crate::spec::FrequencyScale;
use crate::synth::{Arm, Form, Reactance};
use crate::transform::{Band, Kind};

/// One element of the normalized ladder.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NormalizedElement {
    /// Arm number from the source, 1-based.
    pub arm: usize,
    /// Series or shunt.
    pub arm_kind: Arm,
    /// L or C.
    pub kind: Reactance,
    /// Henry or farad at 1 ohm, 1 rad/s.
    pub value: f64,
}

/// One element of a scaled netlist (op-amps left out).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ScaledElement {
    /// Its designator (the SPICE name).
    pub designator: String,
    /// The two node names.
    pub nodes: [String; 2],
    /// Value in SI units.
    pub value: f64,
    /// "ohm", "F", "H" or "V".
    pub unit: &'static str,
}

/// The active builds in a report.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ActiveReport {
    /// The method used (GIC or FDNR).
    pub method: Method,
    /// Why it was used.
    pub why: Why,
    /// The op-amp model every build was simulated with.
    pub opamp: OpAmpModel,
    /// The op-amps' largest output swing, V peak.
    pub swing_v_peak: f64,
    /// The op-amps' input noise.
    pub opamp_noise: crate::circuit::OpAmpNoise,
    /// The op-amps' slew rate, V/s.
    pub slew_v_per_s: f64,
    /// The op-amps' input bias current, A.
    pub bias_current_a: f64,
    /// Number of op-amps.
    pub opamps: usize,
    /// Number of capacitors.
    pub capacitors: usize,
    /// Largest over smallest capacitance of the active exact build.
    pub capacitor_spread: f64,
    /// Whether the active exact build is stable with the op-amp model
    /// (`None`: ideal op-amps, a nullor has no dynamics to judge).
    pub stable: Option<bool>,
    /// Its natural frequency with the smallest damping ratio.
    pub least_damped_natural_frequency: Option<NaturalFrequency>,
    /// The verdict at the corners of the op-amps' spread.
    pub stability_corners: Vec<CornerVerdict>,
    /// Facts of the realization.
    pub notes: Vec<Note>,
    /// The active exact build against the passive ideal.
    pub active_exact: BuildFigures,
    /// The active on parts build against the passive ideal.
    pub active_on_parts: BuildFigures,
    /// The parts the build is bought from.
    pub parts: PartsChoice,
    /// Largest passband deviation from the passive ideal after each step
    /// of the parts stage, dB.
    pub parts_error_db: ErrorSteps,
    /// One trim per GIC chain.
    pub trims: Vec<Trim>,
    /// The tuning procedure, step by step (every trim it does not set is
    /// preset).
    pub tuning_procedure: Vec<TuningStep>,
    /// What the rescaling into the capacitor range did.
    pub rescaled: Vec<Rescale>,
    /// The active exact build's elements.
    pub active_exact_elements: Vec<ScaledElement>,
    /// The active on parts build's elements.
    pub active_on_parts_elements: Vec<ScaledElement>,
}

/// The machine-readable account of a design (`report.json`).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Report {
    /// Program and version that wrote it.
    pub tool: String,
    /// The design file.
    pub design_file: String,
    /// Filter kind.
    pub kind: Kind,
    /// The band edges of the specification.
    pub band: Band,
    /// Approximation family (absent for a table prototype).
    pub family: Option<Family>,
    /// The prototype table, when one was used.
    pub prototype_table: Option<String>,
    /// Order.
    pub order: usize,
    /// How the order was fixed.
    pub order_choice: OrderChoice,
    /// Which form of the approximation (even orders may need a modified
    /// one; absent for a table).
    pub variant: Option<Variant>,
    /// Which dual ladder.
    pub form: Form,
    /// Passband ripple (the monotonic families: loss at the edge), dB.
    pub passband_ripple_db: f64,
    /// What fixed the passband edge, when the design file gave a DC delay
    /// or an asymptote frequency instead of the edge (Bessel lowpass).
    pub frequency_scale: Option<FrequencyScale>,
    /// Stopband attenuation asked for, dB.
    pub stopband_attenuation_db: Option<f64>,
    /// Realized stopband edge(s), Hz, where the attenuation is first
    /// reached (elliptic).
    pub realized_stopband_edge_hz: Option<Vec<f64>>,
    /// The mask after the order was chosen (normalized frequencies).
    pub mask: MaskCheck,
    /// The margins inside the specification the ladder was synthesized
    /// with.
    pub margins: super::Margins,
    /// How a design for yield chose the order and the margins: every
    /// candidate tried, with its yield.
    pub yield_search: Option<super::YieldSearch>,
    /// The passband level of the terminations' divider, dB.
    pub passband_level_db: f64,
    /// Source resistance of the passive ideal, ohm.
    pub source_ohm: f64,
    /// Load resistance of the passive ideal, ohm.
    pub load_ohm: f64,
    /// How the terminations' impedance level was set: the design file's
    /// terminations, the factor on them, the ladder's capacitors before
    /// and after, and the ladder parts outside a default range.
    pub level: LadderLevel,
    /// The normalized ladder (1 ohm source, 1 rad/s).
    pub normalized_elements: Vec<NormalizedElement>,
    /// Normalized load resistance, ohm.
    pub normalized_load_ohm: f64,
    /// The passive ideal's elements.
    pub passive_ideal_elements: Vec<ScaledElement>,
    /// The active builds, when built.
    pub active: Option<ActiveReport>,
    /// How the active builds stand against the specification, and the
    /// yield, when the analyses have run.
    pub outcome: Option<Outcome>,
}

/// The Monte Carlo's boards before tuning.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct BeforeTuning {
    /// Fraction that meet the specification.
    pub yield_fraction: f64,
    /// Its 95 % interval (Wilson's score interval).
    pub yield_interval_95: [f64; 2],
    /// How many meet it.
    pub boards_meeting: usize,
}

/// How the active builds stand against the specification.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Outcome {
    /// The active on parts build with nominal parts (the headline).
    pub active_on_parts: MaskVerdict,
    /// The active exact build.
    pub active_exact: MaskVerdict,
    /// Fraction of Monte Carlo boards of the active on parts build that
    /// meet the specification, each tuned by the tuning procedure.
    pub yield_fraction: f64,
    /// Its 95 % interval (Wilson's score interval).
    pub yield_interval_95: [f64; 2],
    /// Boards drawn.
    pub boards: usize,
    /// Boards that meet the specification.
    pub boards_meeting: usize,
    /// The same boards with every trimmer left at its nominal setting,
    /// when the procedure tunes any.
    pub before_tuning: Option<BeforeTuning>,
    /// Boards whose network is unstable (counted as not meeting it).
    pub boards_unstable: usize,
    /// Boards whose group-delay spread broke the `[delay]` bound (counted
    /// as not meeting it; 0 without one).
    pub boards_over_delay: usize,
    /// The same boards with one class's tolerance halved at a time.
    pub tolerance_payoffs: Vec<super::TolerancePayoff>,
    /// The three builds against the `[delay]` specification, if any.
    pub delay: Option<DelayFigures>,
    /// Output noise of the three builds and the dynamic range.
    pub noise: super::NoiseFigures,
    /// Step responses of the three builds.
    pub step: super::StepReport,
    /// The seed of the draws.
    pub seed: u64,
    /// When the design file gave no trial count and the default was
    /// shortened for a large build ([`super::default_trials`]): its
    /// op-amps.
    pub boards_shortened_for_opamps: Option<usize>,
}

/// Everything the documents of a design are rendered from: the report,
/// the three networks, the analyses and the specification's limits.
#[derive(Debug, Clone)]
pub struct Documents {
    /// The report.
    pub report: Report,
    /// The passive ideal.
    pub passive_ideal: Netlist,
    /// The active exact build.
    pub active_exact: Netlist,
    /// The active on parts build.
    pub active_on_parts: Netlist,
    /// The analyses of the active on parts build.
    pub analyses: Analyses,
    /// The specification as gain limits, dB.
    pub mask: Vec<Limit>,
    /// The frequency range the documents show, Hz.
    pub view_hz: (f64, f64),
    /// The seed of the Monte Carlo run.
    pub seed: u64,
    /// The stages of the active on parts build (which converter each
    /// part belongs to).
    pub stages: Vec<Stage>,
}

/// Every element of a netlist but its op-amps, with node names and units.
fn scaled_elements(net: &Netlist) -> Vec<ScaledElement> {
    let node = |i: usize| net.nodes[i].clone();
    net.elements
        .iter()
        .filter_map(|e| {
            let (a, b, unit) = match *e {
                Element::Resistor { a, b, .. } => (a, b, "ohm"),
                Element::Capacitor { a, b, .. } => (a, b, "F"),
                Element::Inductor { a, b, .. } => (a, b, "H"),
                Element::VoltageSource { pos, neg, .. } => (pos, neg, "V"),
                Element::OpAmp { .. } => return None,
            };
            Some(ScaledElement {
                designator: e.name().to_string(),
                nodes: [node(a), node(b)],
                value: e.value()?,
                unit,
            })
        })
        .collect()
}

impl Design {
    /// The report of the passive ideal alone.
    pub fn report(&self) -> Report {
        let (family, table, variant) = match &self.origin {
            Origin::Family(p) => (Some(p.params.family), None, Some(p.params.variant)),
            Origin::Table(t) => (None, Some(t.file.display().to_string()), None),
        };
        Report {
            tool: format!("nocoil {}", env!("CARGO_PKG_VERSION")),
            design_file: self.spec.file.display().to_string(),
            kind: self.spec.band.kind(),
            band: self.spec.band,
            family,
            prototype_table: table,
            order: self.ladder_order(),
            order_choice: self.order_choice.clone(),
            variant,
            form: self.ladder.form,
            passband_ripple_db: self.passband_ripple_db(),
            frequency_scale: self.spec.frequency_scale,
            stopband_attenuation_db: self.stopband_attenuation_db(),
            realized_stopband_edge_hz: self
                .mask
                .realized_stopband_edge_rad_s
                .map(|w| self.spec.band.frequencies_hz(w)),
            mask: self.mask.clone(),
            margins: self.margins,
            yield_search: self.yield_search.clone(),
            passband_level_db: self.passband_level_db(),
            source_ohm: self.level.source_ohm,
            load_ohm: self.level.load_ohm,
            level: self.level.clone(),
            normalized_elements: self
                .ladder
                .elements
                .iter()
                .map(|e| NormalizedElement {
                    arm: e.arm_index + 1,
                    arm_kind: e.arm,
                    kind: e.kind,
                    value: e.value,
                })
                .collect(),
            normalized_load_ohm: self.ladder.load_ohm,
            passive_ideal_elements: scaled_elements(&self.passive),
            active: None,
            outcome: None,
        }
    }

    /// The report with the active builds in it.
    pub fn report_with(&self, active: &ActiveDesign) -> Report {
        let b = &active.build;
        let verdict = b.stability;
        Report {
            active: Some(ActiveReport {
                method: b.method_used,
                why: b.why.clone(),
                opamp: self.spec.opamp.model,
                swing_v_peak: self.spec.opamp.swing_v,
                opamp_noise: self.spec.opamp.noise,
                slew_v_per_s: self.spec.opamp.slew_v_per_s,
                bias_current_a: self.spec.opamp.bias_current_a,
                opamps: b.opamps,
                capacitors: b.capacitors,
                capacitor_spread: b.capacitor_spread,
                stable: verdict.map(|v| v.stable),
                least_damped_natural_frequency: verdict.and_then(|v| v.least_damped),
                stability_corners: b.corners.clone(),
                notes: b.notes.clone(),
                active_exact: active.exact_figures.clone(),
                active_on_parts: active.on_parts_figures.clone(),
                parts: self.spec.parts,
                parts_error_db: active.on_parts.error_db,
                trims: active.on_parts.trims.clone(),
                tuning_procedure: active.on_parts.procedure.clone(),
                rescaled: active.on_parts.rescaled.clone(),
                active_exact_elements: scaled_elements(&b.netlist),
                active_on_parts_elements: scaled_elements(&active.on_parts.netlist),
            }),
            ..self.report()
        }
    }

    /// Everything the documents are rendered from, with the analyses run.
    pub fn documents(&self, active: &ActiveDesign, analyses: Analyses) -> Documents {
        let mc = &analyses.montecarlo;
        let outcome = Outcome {
            active_on_parts: analyses.active_on_parts_verdict,
            active_exact: analyses.active_exact_verdict,
            yield_fraction: mc.yield_fraction,
            yield_interval_95: interval_95(mc),
            boards: mc.trials,
            boards_meeting: mc.passed,
            before_tuning: analyses.before_tuning.as_ref().map(|b| BeforeTuning {
                yield_fraction: b.yield_fraction,
                yield_interval_95: interval_95(b),
                boards_meeting: b.passed,
            }),
            boards_unstable: mc.unstable,
            boards_over_delay: mc.delay_failed,
            tolerance_payoffs: analyses.payoffs.clone(),
            delay: analyses.delay.clone(),
            noise: analyses.noise.clone(),
            step: analyses.step.clone(),
            seed: self.spec.montecarlo.seed,
            boards_shortened_for_opamps: self.trials_shortened_for(active),
        };
        Documents {
            report: Report {
                outcome: Some(outcome),
                ..self.report_with(active)
            },
            passive_ideal: self.passive.clone(),
            active_exact: active.build.netlist.clone(),
            active_on_parts: active.on_parts.netlist.clone(),
            analyses,
            mask: self.mask_limits(),
            view_hz: self.view_hz(),
            seed: self.spec.montecarlo.seed,
            stages: active.on_parts.stages.clone(),
        }
    }

    /// The order: the number of arms of the ladder.
    pub(crate) fn ladder_order(&self) -> usize {
        self.ladder
            .elements
            .iter()
            .map(|e| e.arm_index + 1)
            .max()
            .unwrap_or(0)
    }
}

/// The 95 % interval of a run's yield (Wilson's score interval).
pub fn interval_95(mc: &crate::analysis::MonteCarloResult) -> [f64; 2] {
    let (lo, hi) = crate::analysis::wilson_interval(mc.passed, mc.trials, crate::analysis::Z95);
    [lo, hi]
}

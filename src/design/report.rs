//! What a finished design reports: a plain serializable [`Report`] (the
//! JSON file) and the human summary printed by `nocoil design`.

use super::{ActiveDesign, Comparison};
use super::{Design, MaskCheck, OrderChoice};
use crate::approx::{Family, Variant};
use crate::circuit::{Element, Netlist};
use crate::export::eng;
use crate::spec::{Edge, Kind, PrototypeSource};
use crate::synth::{Arm, Form, Reactance};
use std::fmt::Write;

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

/// One element of the scaled passive netlist.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ScaledElement {
    /// SPICE name.
    pub name: String,
    /// The two node names.
    pub nodes: [String; 2],
    /// Value in SI units.
    pub value: f64,
    /// "ohm", "F", "H" or "V".
    pub unit: &'static str,
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
    /// Approximation family (absent for a table prototype).
    pub family: Option<Family>,
    /// The prototype table, when one was used.
    pub prototype_table: Option<String>,
    /// Order.
    pub order: usize,
    /// How the order was fixed.
    pub order_choice: OrderChoice,
    /// Which form of the approximation (even orders may need a modified
    /// one).
    pub variant: Option<Variant>,
    /// The variant in words.
    pub variant_note: String,
    /// Which dual ladder.
    pub form: Form,
    /// Passband edge(s), Hz.
    pub passband_edge_hz: Edge,
    /// Stopband edge(s) asked for, Hz.
    pub stopband_edge_hz: Option<Edge>,
    /// Passband ripple (Butterworth: loss at the edge), dB.
    pub passband_ripple_db: f64,
    /// Stopband attenuation asked for, dB.
    pub stopband_attenuation_db: Option<f64>,
    /// Realized stopband edge(s), Hz, where the attenuation is first
    /// reached (elliptic).
    pub realized_stopband_edge_hz: Option<Vec<f64>>,
    /// The mask after the order was chosen (normalized frequencies).
    pub mask: MaskCheck,
    /// Source resistance, ohm.
    pub source_ohm: f64,
    /// Load resistance, ohm.
    pub load_ohm: f64,
    /// The normalized ladder (1 ohm source, 1 rad/s).
    pub normalized_elements: Vec<NormalizedElement>,
    /// Normalized load resistance.
    pub normalized_load_ohm: f64,
    /// The scaled passive ideal.
    pub passive_elements: Vec<ScaledElement>,
    /// The active build compared with the passive ideal, when built.
    pub active: Option<Comparison>,
    /// The active network's elements.
    pub active_elements: Vec<ScaledElement>,
}

/// Every element of a netlist but its op-amps, with node names and units.
fn scaled_elements(net: &Netlist) -> Vec<ScaledElement> {
    let node = |i: usize| net.nodes[i].clone();
    net.elements
        .iter()
        .filter_map(|e| {
            let (a, b) = match *e {
                Element::Resistor { a, b, .. }
                | Element::Capacitor { a, b, .. }
                | Element::Inductor { a, b, .. } => (a, b),
                Element::VoltageSource { pos, neg, .. } => (pos, neg),
                Element::OpAmp { .. } => return None,
            };
            Some(ScaledElement {
                name: e.name().to_string(),
                nodes: [node(a), node(b)],
                value: e.value()?,
                unit: unit_of(e),
            })
        })
        .collect()
}

fn variant_note(v: Option<Variant>) -> &'static str {
    match v {
        None => "tabulated ladder",
        Some(Variant::Standard) => "standard form",
        Some(Variant::ZeroAtInfinity) => {
            "modified even-order form: highest transmission zero moved to infinity (unequal terminations)"
        }
        Some(Variant::ReflectionAtDc) => {
            "modified even-order form: lowest reflection zero moved to DC, so the terminations may be equal"
        }
    }
}

fn unit_of(e: &Element) -> &'static str {
    match e {
        Element::Resistor { .. } => "ohm",
        Element::Capacitor { .. } => "F",
        Element::Inductor { .. } => "H",
        Element::VoltageSource { .. } => "V",
        Element::OpAmp { .. } => "",
    }
}

impl Design {
    /// The report of this design.
    pub fn report(&self) -> Report {
        let (family, table, ripple, variant) = match (&self.prototype, &self.table) {
            (Some(p), _) => (
                Some(p.params.family),
                None,
                p.params.passband_ripple_db,
                Some(p.params.variant),
            ),
            (None, Some(t)) => (
                None,
                Some(t.file.display().to_string()),
                t.passband_ripple_db,
                None,
            ),
            (None, None) => unreachable!("a design has a prototype or a table"),
        };
        let attenuation = match &self.spec.prototype {
            PrototypeSource::Family {
                stopband_attenuation_db,
                ..
            } => *stopband_attenuation_db,
            PrototypeSource::Table { .. } => {
                self.table.as_ref().and_then(|t| t.stopband_attenuation_db)
            }
        };
        let passive_elements = scaled_elements(&self.passive);
        Report {
            tool: format!("nocoil {}", env!("CARGO_PKG_VERSION")),
            design_file: self.spec.file.display().to_string(),
            kind: self.spec.kind,
            family,
            prototype_table: table,
            order: self.ladder_order(),
            order_choice: self.order_choice.clone(),
            variant,
            variant_note: variant_note(variant).to_string(),
            form: self.ladder.form,
            passband_edge_hz: self.spec.passband_edge_hz,
            stopband_edge_hz: self.spec.stopband_edge_hz,
            passband_ripple_db: ripple,
            stopband_attenuation_db: attenuation,
            realized_stopband_edge_hz: self
                .mask
                .realized_stopband_edge
                .map(|w| self.mapping.frequencies_hz(w)),
            mask: self.mask.clone(),
            source_ohm: self.spec.source_ohm,
            load_ohm: self.spec.load_ohm,
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
            passive_elements,
            active: None,
            active_elements: Vec::new(),
        }
    }

    /// The report with the active build in it.
    pub fn report_with(&self, active: &ActiveDesign) -> Report {
        Report {
            active: Some(active.comparison.clone()),
            active_elements: scaled_elements(&active.build.netlist),
            ..self.report()
        }
    }

    /// The order: the number of arms of the ladder.
    fn ladder_order(&self) -> usize {
        self.ladder
            .elements
            .iter()
            .map(|e| e.arm_index + 1)
            .max()
            .unwrap_or(0)
    }

    /// The summary `nocoil design` prints.
    pub fn summary(&self) -> String {
        let r = self.report();
        let mut s = String::new();
        let what = match r.family {
            Some(f) => format!("{f:?}").to_lowercase(),
            None => format!("table {}", r.prototype_table.as_deref().unwrap_or("")),
        };
        let how = match &r.order_choice {
            OrderChoice::Given => "given".to_string(),
            OrderChoice::Table => "from the table".to_string(),
            OrderChoice::Computed {
                minimum,
                raised_for_form: false,
            } => format!("the minimum for the mask, {minimum}"),
            OrderChoice::Computed {
                minimum,
                raised_for_form: true,
            } => {
                format!("raised from the minimum {minimum}: the even-order form the terminations need missed the mask")
            }
        };
        let kind = format!("{:?}", r.kind).to_lowercase();
        let form = match r.form {
            Form::MinCapacitor => "minimum-capacitor ladder (series inductor first)",
            Form::MinInductor => "minimum-inductor ladder (shunt capacitor first)",
        };
        let hz = |e: Edge| match e {
            Edge::Single(f) => eng::format(f, "Hz"),
            Edge::Pair(a, b) => format!("{} and {}", eng::format(a, "Hz"), eng::format(b, "Hz")),
        };
        // dB figures as a designer writes them: 0.1, 3.0103.
        let db = |x: f64| (x * 1e4).round() / 1e4;
        let _ = writeln!(s, "{what} {kind}, order {} ({how})", r.order);
        let _ = writeln!(s, "  {}; {form}", r.variant_note);
        let _ = writeln!(
            s,
            "  passband edge {}, ripple {} dB",
            hz(r.passband_edge_hz),
            db(r.passband_ripple_db)
        );
        if let (Some(stop), Some(a)) = (r.stopband_edge_hz, r.stopband_attenuation_db) {
            let reached = self
                .mask
                .attenuation_at_stopband_edge_db
                .map(|x| format!(", {x:.2} dB reached there"))
                .unwrap_or_default();
            let _ = writeln!(
                s,
                "  stopband edge {}, {} dB asked{reached}",
                hz(stop),
                db(a)
            );
        }
        if self.mask.meets_mask == Some(false) {
            let _ = writeln!(
                s,
                "  WARNING: the given order does not meet the stopband mask; raise it or omit it"
            );
        }
        if let Some(edges) = &r.realized_stopband_edge_hz {
            let list: Vec<String> = edges.iter().map(|f| eng::format(*f, "Hz")).collect();
            let _ = writeln!(s, "  attenuation first reached at {}", list.join(" and "));
        }
        let _ = writeln!(
            s,
            "  terminations: source {}, load {}",
            eng::format(r.source_ohm, "ohm"),
            eng::format(r.load_ohm, "ohm")
        );
        let _ = writeln!(
            s,
            "normalized prototype (1 ohm source, 1 rad/s edge), load {:.6} ohm:",
            r.normalized_load_ohm
        );
        for e in &r.normalized_elements {
            let unit = match e.kind {
                Reactance::Inductor => "H",
                Reactance::Capacitor => "F",
            };
            let _ = writeln!(
                s,
                "  arm {:<3} {:<6} {:.6} {unit}",
                e.arm,
                format!("{:?}", e.arm_kind).to_lowercase(),
                e.value
            );
        }
        let _ = writeln!(s, "passive ideal:");
        for e in &r.passive_elements {
            let _ = writeln!(
                s,
                "  {:<5} {:<5} {:<5} {}",
                e.name,
                e.nodes[0],
                e.nodes[1],
                eng::format(e.value, e.unit)
            );
        }
        s
    }
}

impl ActiveDesign {
    /// The part of the summary about the active build.
    pub fn summary(&self) -> String {
        let c = &self.comparison;
        let mut s = String::new();
        let model = match c.opamp {
            crate::circuit::OpAmpModel::SinglePole {
                dc_gain, gbw_hz, ..
            } => {
                format!(
                    "single-pole op-amps, GBW {}, A0 {:.0} dB",
                    eng::format(gbw_hz, "Hz"),
                    20.0 * dc_gain.log10()
                )
            }
            crate::circuit::OpAmpModel::Ideal => "ideal op-amps".to_string(),
        };
        let _ = writeln!(
            s,
            "active build: {:?}, {} op-amps, {} capacitors (spread {:.1})",
            c.method, c.opamps, c.capacitors, c.capacitor_spread
        );
        let _ = writeln!(s, "  why: {}", c.why);
        let _ = writeln!(
            s,
            "  simulated with {model}: {}",
            if c.stable { "stable" } else { "UNSTABLE" }
        );
        let _ = writeln!(
            s,
            "  largest passband deviation from the passive ideal {:.4} dB",
            c.passband_deviation_db
        );
        for ((e, a), p) in c
            .passband_edge_hz
            .iter()
            .zip(&c.active_edge_hz)
            .zip(&c.edge_shift_percent)
        {
            match (a, p) {
                (Some(a), Some(p)) => {
                    let _ = writeln!(
                        s,
                        "  passband edge {} moves to {} ({p:+.3} %)",
                        eng::format(*e, "Hz"),
                        eng::format(*a, "Hz")
                    );
                }
                _ => {
                    let _ = writeln!(
                        s,
                        "  passband edge {}: no crossing within 25 %",
                        eng::format(*e, "Hz")
                    );
                }
            }
        }
        for ((f, a), p) in c
            .stopband_edge_hz
            .iter()
            .zip(&c.attenuation_at_stopband_edge_db)
            .zip(&c.passive_attenuation_at_stopband_edge_db)
        {
            let _ = writeln!(
                s,
                "  attenuation at {}: {a:.2} dB (passive {p:.2} dB)",
                eng::format(*f, "Hz")
            );
        }
        let _ = writeln!(
            s,
            "  largest gain to an op-amp output: {:.2} dB at {} ({})",
            c.largest_opamp_gain_db,
            eng::format(c.largest_opamp_gain_hz, "Hz"),
            c.largest_opamp_gain_at
        );
        for n in &c.notes {
            let _ = writeln!(s, "  note: {n}");
        }
        s
    }
}

//! The documents of a finished design a colleague reviews: charts, the
//! sensitivity and signal-level tables, the bill of materials and the
//! one-page HTML report. Everything is computed here from the design and
//! handed to the generic writers of [`crate::export`].

use super::{envelope_csv, passbands, yield_summary, ActiveDesign, Design, DesignError};
use crate::analysis::MonteCarloResult;
use crate::analysis::{
    opamp_levels, summarize, OpAmpLevel, Parameter, SensitivitySummary, SummaryPoints,
};
use crate::circuit::{log_grid, AcSystem, Element, Netlist, Response};
use crate::export::bom::{bom_csv, group_rows, tally, BomRow};
use crate::export::eng;
use crate::export::html::{html_report, Figure, ReportDoc, Table};
use crate::export::plot::{self, Band, Chart, MaskBox, PngOutput, Trace};

/// Points of the response charts.
const CHART_POINTS: usize = 600;
/// Size of a standalone chart, pixels.
const CHART_SIZE: (u32, u32) = (800, 500);
/// Size of a chart inside the report: two to a printed row stay legible.
const REPORT_CHART_SIZE: (u32, u32) = (640, 400);
/// How far below the passband level the magnitude chart reaches, dB.
const CHART_FLOOR_DB: f64 = 120.0;

/// The cautions every report carries.
pub const CAUTIONS: [&str; 3] = [
    "These results are a design aid: a prototype built from real parts must be measured against the specification before the design is released.",
    "Mains-powered or safety-related equipment follows local codes and licensed practice; nothing here replaces them.",
    "The op-amp model is single-pole; slew rate, noise, output current and input bias are not simulated.",
];

/// The computed analyses behind the documents.
#[derive(Debug, Clone)]
pub struct Analyses {
    /// Chart frequencies, Hz.
    pub freq_hz: Vec<f64>,
    /// Passive ideal response.
    pub passive: Response,
    /// Active build response.
    pub active: Response,
    /// Group delay of the passive ideal, s.
    pub passive_delay_s: Vec<f64>,
    /// Group delay of the active build, s.
    pub active_delay_s: Vec<f64>,
    /// Per-element sensitivities of the active build.
    pub sensitivity: Vec<SensitivitySummary>,
    /// Peak gain to every op-amp output and the input level it allows.
    pub levels: Vec<OpAmpLevel>,
    /// Gain from the input to each op-amp output over the chart grid, dB.
    pub level_traces: Vec<(String, Vec<f64>)>,
    /// The Monte Carlo run.
    pub montecarlo: MonteCarloResult,
}

impl Design {
    /// Runs the analyses the documents need on the active build.
    pub fn analyses(&self, active: &ActiveDesign) -> Result<Analyses, DesignError> {
        let file = || self.spec.file.clone();
        let circuit = |cause| DesignError::Circuit {
            file: file(),
            cause,
        };
        let analysis = |cause| DesignError::Analysis {
            file: file(),
            cause,
        };
        let net = &active.build.netlist;
        let (lo, hi) = self.default_band();
        let freq_hz = log_grid(lo, hi, CHART_POINTS).map_err(circuit)?;
        let passive = super::response(&self.passive, &freq_hz).map_err(circuit)?;
        let active_response = super::response(net, &freq_hz).map_err(circuit)?;
        let (inp, out) = (
            net.require_node("in").map_err(circuit)?,
            net.require_node("out").map_err(circuit)?,
        );
        let mut system = AcSystem::new(net).map_err(circuit)?;
        let pass_grid: Vec<f64> = passbands(self.mapping, (lo, hi))
            .iter()
            .flat_map(|[a, b]| log_grid(*a, *b, 50).unwrap_or_default())
            .collect();
        let points = SummaryPoints {
            passband_edges_hz: active.comparison.passband_edge_hz.clone(),
            passband_hz: pass_grid,
            stopband_edges_hz: match active.comparison.stopband_edge_hz.is_empty() {
                true => self.mapping.frequencies_hz(self.stopband_reference()),
                false => active.comparison.stopband_edge_hz.clone(),
            },
        };
        let sensitivity = summarize(&mut system, out, inp, &points).map_err(analysis)?;
        let levels =
            opamp_levels(&mut system, inp, &freq_hz, self.spec.opamp.swing_v).map_err(analysis)?;
        let mut level_traces: Vec<(String, Vec<f64>)> = levels
            .iter()
            .map(|l| (l.name.clone(), Vec::new()))
            .collect();
        for &f in &freq_hz {
            let v = system.node_voltages(f).map_err(circuit)?;
            for (trace, l) in level_traces.iter_mut().zip(&levels) {
                trace.1.push(20.0 * (v[l.out_node] / v[inp]).norm().log10());
            }
        }
        let mc = &self.spec.montecarlo;
        let montecarlo = self.monte_carlo(net, mc.trials, mc.seed, None)?;
        Ok(Analyses {
            passive_delay_s: super::group_delay(&self.passive, &freq_hz).map_err(circuit)?,
            active_delay_s: super::group_delay(net, &freq_hz).map_err(circuit)?,
            freq_hz,
            passive,
            active: active_response,
            sensitivity,
            levels,
            level_traces,
            montecarlo,
        })
    }

    /// Without a stopband edge in the design file, sensitivities "at the
    /// stopband edge" are taken where the normalized prototype is at twice
    /// its passband edge: a point of the transition band every family has.
    fn stopband_reference(&self) -> f64 {
        2.0
    }

    /// The specification mask as shaded boxes for a chart.
    fn mask_boxes(&self) -> Vec<MaskBox> {
        self.mask_limits()
            .iter()
            .map(|l| MaskBox {
                from_hz: l.from_hz,
                to_hz: l.to_hz,
                min_db: Some(l.min_db).filter(|v| v.is_finite()),
                max_db: Some(l.max_db).filter(|v| v.is_finite()),
            })
            .collect()
    }

    /// Every chart, with its file stem and caption.
    pub fn charts(&self, a: &Analyses) -> Vec<(&'static str, &'static str, Chart)> {
        let f = &a.freq_hz;
        let trace = |label: &str, values: Vec<f64>, dashed: bool| Trace {
            label: label.to_string(),
            freq_hz: f.clone(),
            values,
            dashed,
        };
        let level = self.passband_level_db();
        let both = |p: Vec<f64>, q: Vec<f64>| {
            vec![
                trace("passive ideal", p, false),
                trace("active build", q, true),
            ]
        };
        let base = |title: &str, y: &str| Chart {
            title: title.to_string(),
            x_label: "frequency (Hz)".to_string(),
            y_label: y.to_string(),
            log_x: true,
            ..Chart::default()
        };
        let ripple = self
            .mask_limits()
            .iter()
            .filter(|l| l.min_db.is_finite())
            .map(|l| level - l.min_db)
            .fold(0.0, f64::max);
        let pass = passbands(self.mapping, self.default_band());
        let (plo, phi) = pass
            .iter()
            .fold((f64::INFINITY, 0.0_f64), |(lo, hi), [a, b]| {
                (lo.min(*a), hi.max(*b))
            });
        let delay = |r: &Response| {
            r.group_delay_s()
                .unwrap_or_else(|_| vec![f64::NAN; r.freq_hz.len()])
        };
        let mc = &a.montecarlo;
        vec![
            (
                "magnitude",
                "Magnitude of the passive ideal and the active build, with the specification mask",
                Chart {
                    traces: both(a.passive.db(), a.active.db()),
                    mask: self.mask_boxes(),
                    y_range: Some((level - CHART_FLOOR_DB, level + 5.0)),
                    ..base("Magnitude", "gain (dB)")
                },
            ),
            (
                "passband",
                "Passband detail",
                Chart {
                    traces: both(a.passive.db(), a.active.db()),
                    mask: self.mask_boxes(),
                    x_range: Some((plo, phi)),
                    y_range: Some((
                        level - 2.0 * ripple.max(0.05),
                        level + 0.5 * ripple.max(0.05),
                    )),
                    ..base("Passband detail", "gain (dB)")
                },
            ),
            (
                "phase",
                "Phase",
                Chart {
                    traces: both(a.passive.phase_deg(), a.active.phase_deg()),
                    ..base("Phase", "phase (degrees)")
                },
            ),
            (
                "delay",
                "Group delay",
                Chart {
                    traces: both(
                        delay(&a.passive).iter().map(|d| d * 1e3).collect(),
                        delay(&a.active).iter().map(|d| d * 1e3).collect(),
                    ),
                    ..base("Group delay", "delay (ms)")
                },
            ),
            (
                "levels",
                "Gain from the input to every op-amp output",
                Chart {
                    traces: a
                        .level_traces
                        .iter()
                        .map(|(n, v)| trace(n, v.clone(), false))
                        .collect(),
                    ..base("Op-amp output levels", "gain to output (dB)")
                },
            ),
            (
                "montecarlo",
                "Monte Carlo envelope (min, median, max) with the specification mask",
                Chart {
                    traces: vec![Trace {
                        label: "nominal".to_string(),
                        freq_hz: mc.freq_hz.clone(),
                        values: mc.nominal_db.clone(),
                        dashed: true,
                    }],
                    band: Some(Band {
                        label: format!("{} trials", mc.per_trial.len()),
                        freq_hz: mc.freq_hz.clone(),
                        min: mc.envelope.min_db.clone(),
                        median: mc.envelope.median_db.clone(),
                        max: mc.envelope.max_db.clone(),
                    }),
                    mask: self.mask_boxes(),
                    y_range: Some((level - CHART_FLOOR_DB, level + 5.0)),
                    ..base("Monte Carlo envelope", "gain (dB)")
                },
            ),
        ]
    }

    /// The bill of materials of both builds, identical parts grouped.
    pub fn bom_rows(&self, active: &ActiveDesign) -> Vec<BomRow> {
        let p = &self.spec.parts;
        let stage_of = |name: &str| {
            active
                .build
                .stages
                .iter()
                .find(|s| s.elements.iter().chain(&s.opamps).any(|e| e == name))
                .map(|s| {
                    format!(
                        "{:?} for {}",
                        s.kind,
                        s.replaces.as_deref().unwrap_or("output")
                    )
                })
                .unwrap_or_else(|| "ladder".to_string())
        };
        let rows = |net: &Netlist, build: &str, real: bool| -> Vec<BomRow> {
            net.elements
                .iter()
                .filter_map(|e| {
                    let (kind, unit, value, series, tol) = match e {
                        Element::Resistor { ohm, .. } => (
                            "resistor",
                            "ohm",
                            *ohm,
                            p.resistor_series,
                            p.resistor_tolerance,
                        ),
                        Element::Capacitor { farad, .. } => (
                            "capacitor",
                            "F",
                            *farad,
                            p.capacitor_series,
                            p.capacitor_tolerance,
                        ),
                        Element::Inductor { henry, .. } => (
                            "inductor",
                            "H",
                            *henry,
                            p.capacitor_series,
                            p.capacitor_tolerance,
                        ),
                        Element::OpAmp {
                            model: crate::circuit::OpAmpModel::SinglePole { gbw_hz, .. },
                            ..
                        } => (
                            "op-amp",
                            "Hz GBW",
                            *gbw_hz,
                            p.resistor_series,
                            self.spec.montecarlo.gbw_spread,
                        ),
                        Element::OpAmp { .. } | Element::VoltageSource { .. } => return None,
                    };
                    let is_part = !matches!(e, Element::OpAmp { .. } | Element::Inductor { .. });
                    Some(BomRow {
                        designators: vec![e.name().to_string()],
                        kind: kind.to_string(),
                        value,
                        unit: unit.to_string(),
                        series: (real && is_part).then(|| format!("{series:?}")),
                        tolerance: is_part.then_some(tol),
                        quantity: 1,
                        stage: if real {
                            stage_of(e.name())
                        } else {
                            "ladder".to_string()
                        },
                        build: build.to_string(),
                    })
                })
                .collect()
        };
        let mut all = rows(&self.passive, "passive", false);
        all.extend(rows(&active.build.netlist, "active", true));
        group_rows(&all)
    }

    /// The one-page HTML report.
    pub fn html(
        &self,
        active: &ActiveDesign,
        a: &Analyses,
        figures: Vec<Figure>,
        bom: &[BomRow],
    ) -> String {
        let r = self.report_with(active);
        let c = &active.comparison;
        let mut summary = vec![
            ("design file".to_string(), r.design_file.clone()),
            (
                "filter".to_string(),
                format!(
                    "{} {}, order {}",
                    r.family
                        .map_or("table".to_string(), |f| format!("{f:?}").to_lowercase()),
                    format!("{:?}", r.kind).to_lowercase(),
                    r.order
                ),
            ),
            (
                "form".to_string(),
                format!(
                    "{}; {}",
                    r.variant_note,
                    match r.form {
                        crate::synth::Form::MinCapacitor => "minimum-capacitor ladder",
                        crate::synth::Form::MinInductor => "minimum-inductor ladder",
                    }
                ),
            ),
            (
                "terminations".to_string(),
                format!(
                    "{} / {}",
                    eng::format(r.source_ohm, "ohm"),
                    eng::format(r.load_ohm, "ohm")
                ),
            ),
            (
                "active build".to_string(),
                format!(
                    "{:?}: {} op-amps, {} capacitors (spread {:.1})",
                    c.method, c.opamps, c.capacitors, c.capacitor_spread
                ),
            ),
            ("why".to_string(), c.why.clone()),
            (
                "stability".to_string(),
                if c.stable {
                    "stable with the op-amp model".into()
                } else {
                    "UNSTABLE".into()
                },
            ),
            (
                "passband deviation".to_string(),
                format!("{:.4} dB from the passive ideal", c.passband_deviation_db),
            ),
            (
                "yield".to_string(),
                yield_summary(&a.montecarlo, self.spec.montecarlo.seed)
                    .lines()
                    .next()
                    .unwrap_or("")
                    .to_string(),
            ),
        ];
        for ((f, at), p) in c
            .stopband_edge_hz
            .iter()
            .zip(&c.attenuation_at_stopband_edge_db)
            .zip(&c.passive_attenuation_at_stopband_edge_db)
        {
            summary.push((
                format!("attenuation at {}", eng::format(*f, "Hz")),
                format!("{at:.2} dB (passive {p:.2} dB)"),
            ));
        }
        let mut tables = vec![Table {
            caption: "Op-amp signal levels".to_string(),
            header: [
                "op-amp",
                "peak gain (dB)",
                "at",
                "max input (V peak)",
                "clips first",
            ]
            .map(String::from)
            .to_vec(),
            rows: a
                .levels
                .iter()
                .map(|l| {
                    vec![
                        l.name.clone(),
                        format!("{:.2}", l.peak_gain_db),
                        eng::format(l.peak_freq_hz, "Hz"),
                        format!("{:.3}", l.max_input_v),
                        if l.clips_first {
                            "yes".into()
                        } else {
                            String::new()
                        },
                    ]
                })
                .collect(),
        }];
        let mut worst: Vec<&SensitivitySummary> = a.sensitivity.iter().collect();
        worst.sort_by(|x, y| {
            y.passband_worst
                .db_per_percent
                .abs()
                .total_cmp(&x.passband_worst.db_per_percent.abs())
        });
        tables.push(Table {
            caption: "Sensitivities, dB per % (largest passband effect first)".to_string(),
            header: [
                "part",
                "quantity",
                "passband edge",
                "passband worst",
                "stopband edge",
            ]
            .map(String::from)
            .to_vec(),
            rows: worst
                .iter()
                .map(|s| {
                    vec![
                        s.name.clone(),
                        match s.parameter {
                            Parameter::Value => "value".into(),
                            Parameter::GainBandwidth => "GBW".into(),
                        },
                        format!("{:+.5}", s.passband_edge.db_per_percent),
                        format!("{:+.5}", s.passband_worst.db_per_percent),
                        format!("{:+.5}", s.stopband_edge.db_per_percent),
                    ]
                })
                .collect(),
        });
        tables.push(Table {
            caption: "Parts (both builds)".to_string(),
            header: [
                "build",
                "designators",
                "kind",
                "value",
                "series",
                "tolerance",
                "qty",
                "stage",
            ]
            .map(String::from)
            .to_vec(),
            rows: bom
                .iter()
                .map(|b| {
                    vec![
                        b.build.clone(),
                        b.designators.join(" "),
                        b.kind.clone(),
                        eng::format(b.value, &b.unit),
                        b.series.clone().unwrap_or_default(),
                        b.tolerance
                            .map(|t| format!("{:.1} %", 100.0 * t))
                            .unwrap_or_default(),
                        b.quantity.to_string(),
                        b.stage.clone(),
                    ]
                })
                .collect(),
        });
        let tallies = tally(bom)
            .iter()
            .map(|t| {
                format!(
                    "{} build: {} x {}, spread {:.1}",
                    t.build,
                    t.quantity,
                    t.kind,
                    t.spread()
                )
            })
            .collect::<Vec<_>>();
        html_report(&ReportDoc {
            title: format!("nocoil design report: {}", r.design_file),
            summary,
            cautions: CAUTIONS.iter().map(|s| s.to_string()).collect(),
            figures,
            tables,
            notes: c.notes.iter().cloned().chain(tallies).collect(),
        })
    }

    /// Every document file: charts (SVG, and PNG where a font is found),
    /// the Monte Carlo envelope, sensitivities, the bill of materials and
    /// the HTML report.
    pub fn document_files(
        &self,
        active: &ActiveDesign,
    ) -> Result<Vec<(String, Vec<u8>)>, DesignError> {
        let export = |cause: String| DesignError::Export {
            file: self.spec.file.clone(),
            cause,
        };
        let a = self.analyses(active)?;
        let mut files = Vec::new();
        let mut figures = Vec::new();
        for (stem, caption, chart) in self.charts(&a) {
            let svg =
                plot::svg(&chart, CHART_SIZE.0, CHART_SIZE.1).map_err(|e| export(e.to_string()))?;
            files.push((format!("{stem}.svg"), svg.into_bytes()));
            if let PngOutput::Image { bytes, .. } =
                plot::png(&chart, CHART_SIZE.0, CHART_SIZE.1).map_err(|e| export(e.to_string()))?
            {
                files.push((format!("{stem}.png"), bytes));
            }
            figures.push(Figure {
                caption: caption.to_string(),
                svg: plot::svg(&chart, REPORT_CHART_SIZE.0, REPORT_CHART_SIZE.1)
                    .map_err(|e| export(e.to_string()))?,
            });
        }
        let bom = self.bom_rows(active);
        files.push((
            "bom.csv".to_string(),
            bom_csv(&bom)
                .map_err(|e| export(e.to_string()))?
                .into_bytes(),
        ));
        files.push((
            "montecarlo.csv".to_string(),
            envelope_csv(&a.montecarlo).into_bytes(),
        ));
        files.push((
            "sensitivity.csv".to_string(),
            sensitivity_csv(&a.sensitivity).into_bytes(),
        ));
        files.push((
            "report.html".to_string(),
            self.html(active, &a, figures, &bom).into_bytes(),
        ));
        Ok(files)
    }
}

/// Sensitivities as CSV: part, quantity, and dB per % with its frequency
/// at the passband edge, the passband's worst point and the stopband edge.
pub fn sensitivity_csv(rows: &[SensitivitySummary]) -> String {
    let mut s = String::from("part,quantity,edge_db_per_percent,edge_hz,passband_worst_db_per_percent,passband_worst_hz,stopband_db_per_percent,stopband_hz\n");
    for r in rows {
        let q = match r.parameter {
            Parameter::Value => "value",
            Parameter::GainBandwidth => "gbw",
        };
        s.push_str(&format!(
            "{},{q},{:.6e},{:.6e},{:.6e},{:.6e},{:.6e},{:.6e}\n",
            r.name,
            r.passband_edge.db_per_percent,
            r.passband_edge.freq_hz,
            r.passband_worst.db_per_percent,
            r.passband_worst.freq_hz,
            r.stopband_edge.db_per_percent,
            r.stopband_edge.freq_hz
        ));
    }
    s
}

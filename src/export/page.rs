//! The one-page HTML report of a design, as [`ReportDoc`] data for
//! [`super::html::html_report`]: the verdict on the active on parts build
//! first, then the builds side by side, the charts and the tables.

use super::bom::{tally, BomRow};
use super::eng::format_trimmed as eng;
use super::html::{html_report, Figure, ReportDoc, Table};
use super::prose::{db, factor, level_warnings, opamp_model, scale_words, signed};
use super::search::{margins_words, next_step_words, search_table, search_words};
use super::summary::{edges, verdict_line, yield_line};
use crate::analysis::Parameter;
use crate::design::{Build, Documents};

/// The cautions every report carries.
pub const CAUTIONS: [&str; 3] = [
    "These results are a design aid: a prototype built from real parts must be measured against the specification before the design is released.",
    "Mains-powered or safety-related equipment follows local codes and licensed practice; nothing here replaces them.",
    "Op-amps are simulated with the small-signal model the summary names (ideal, single-pole or two-pole); their input noise enters the noise figures, and their swing, slew rate and output current bound the largest input, and their input bias current sets the DC reported, as stated in the design file or assumed by default (limits on the linear response: clipping itself and the input offset voltage are not simulated).",
];

/// A sensitivity extreme in a table cell: "-" where its group's output
/// vanished everywhere (see analysis::Extreme::found).
fn extreme(e: &crate::analysis::Extreme) -> String {
    match e.found() {
        true => signed(e.db_per_percent),
        false => "-".to_string(),
    }
}

/// The report page, with the charts as SVG `figures` and the bill of
/// materials `bom`.
pub fn design_page(d: &Documents, figures: Vec<Figure>, bom: &[BomRow]) -> String {
    let r = &d.report;
    let a = &d.analyses;
    let mut summary = vec![
        (
            "verdict".to_string(),
            verdict_line(
                Build::ActiveOnParts,
                &a.active_on_parts_verdict,
                a.delay.as_ref().map(|d| &d.active_on_parts),
                r,
            ),
        ),
        ("yield".to_string(), yield_line(d)),
        (
            "active exact".to_string(),
            verdict_line(
                Build::ActiveExact,
                &a.active_exact_verdict,
                a.delay.as_ref().map(|d| &d.active_exact),
                r,
            ),
        ),
        ("design file".to_string(), r.design_file.clone()),
        (
            "filter".to_string(),
            format!(
                "{} {}, order {}; passband edge {}{}",
                r.family.map_or("table".to_string(), |f| f.to_string()),
                r.kind,
                r.order,
                edges(&r.band.passband_edges_hz()),
                r.frequency_scale
                    .map(|f| format!(" ({})", scale_words(f)))
                    .unwrap_or_default()
            ),
        ),
        (
            "form".to_string(),
            format!(
                "{}; {} ladder",
                r.variant
                    .map_or("tabulated ladder".to_string(), |v| v.to_string()),
                r.form
            ),
        ),
        (
            "terminations".to_string(),
            format!("{} / {}", eng(r.source_ohm, "ohm"), eng(r.load_ohm, "ohm")),
        ),
        ("impedance level".to_string(), r.level.to_string()),
    ];
    if let Some(search) = &r.yield_search {
        summary.insert(2, ("design for yield".to_string(), search_words(search)));
    }
    if let Some(words) = r.active.as_ref().and_then(|act| {
        super::prose::bias_warning(act.active_on_parts.bias.as_ref(), act.swing_v_peak)
    }) {
        summary.insert(1, ("DC from input bias".to_string(), words));
    }
    if let Some(words) = next_step_words(r) {
        summary.insert(2, ("next step".to_string(), words));
    }
    if let Some(words) = margins_words(r) {
        summary.push(("margins".to_string(), words));
    }
    let mut tables = Vec::new();
    if let Some(search) = &r.yield_search {
        tables.push(search_table(search));
    }
    let mut notes = level_warnings(&r.level);
    if let Some(act) = &r.active {
        summary.push((
            Build::ActiveExact.to_string(),
            format!(
                "{}: {} op-amps, {} capacitors (spread {}); {}; {}",
                act.method,
                act.opamps,
                act.capacitors,
                factor(act.capacitor_spread),
                opamp_model(&act.opamp),
                super::prose::stability(act)
            ),
        ));
        summary.push(("why".to_string(), act.why.to_string()));
        for (build, f) in [
            (Build::ActiveExact, &act.active_exact),
            (Build::ActiveOnParts, &act.active_on_parts),
        ] {
            let c = &f.comparison;
            summary.push((
                format!("{build}: passband deviation"),
                format!("{} dB from the passive ideal", db(c.passband_deviation_db)),
            ));
            for (hz, g) in c.stopband_edge_hz.iter().zip(&c.stopband_edge_gain_db) {
                summary.push((
                    format!("{build}: attenuation at {}", eng(*hz, "Hz")),
                    format!("{} dB", db(-g)),
                ));
            }
            if !f.levels.is_empty() {
                summary.push((
                    format!("{build}: DC from input bias"),
                    super::prose::bias_words(act.bias_current_a, f.bias.as_ref(), act.swing_v_peak),
                ));
            }
        }
        let e = &act.parts_error_db;
        summary.push((
            format!("{}: parts steps", Build::ActiveOnParts),
            format!(
                "passband deviation {} dB after rescaling, {} dB on preferred values, {} dB trimmed",
                db(e.ideal_values),
                db(e.snapped),
                db(e.trimmed)
            ),
        ));
        tables.push(Table {
            caption: format!(
                "Trims of the {} build (every trimmer preset to its setting, then those the tuning procedure names set by its steps)",
                Build::ActiveOnParts
            ),
            header: [
                "trimmed resistor",
                "converter for",
                "solved value",
                "fixed",
                "trimmer",
                "setting",
                "set by",
            ]
            .map(String::from)
            .to_vec(),
            rows: act
                .trims
                .iter()
                .map(|t| {
                    let trimmer = crate::realize::trimmer_designator(&t.element);
                    vec![
                        t.element.clone(),
                        t.stage.clone(),
                        eng(t.value_ohm, "ohm"),
                        eng(t.fixed_ohm, "ohm"),
                        format!("{} {trimmer}", eng(t.pot_ohm, "ohm")),
                        eng(t.setting_ohm, "ohm"),
                        super::prose::trim_goal_words(&t.goal, &trimmer, &act.tuning_procedure),
                    ]
                })
                .collect(),
        });
        match act.tuning_procedure.is_empty() {
            true => notes.push(format!(
                "{}: {}",
                Build::ActiveOnParts,
                super::prose::tuning_heading(0)
            )),
            false => tables.push(Table {
                caption: format!(
                    "{}: {}",
                    Build::ActiveOnParts,
                    super::prose::tuning_heading(act.tuning_procedure.len())
                ),
                header: ["step", "what to do"].map(String::from).to_vec(),
                rows: act
                    .tuning_procedure
                    .iter()
                    .enumerate()
                    .map(|(k, step)| {
                        vec![(k + 1).to_string(), super::prose::tuning_step_words(step)]
                    })
                    .collect(),
            }),
        }
        if act.active_on_parts.levels.is_empty() {
            summary.push((
                format!("{}: op-amp levels", Build::ActiveOnParts),
                super::prose::NO_OPAMPS.to_string(),
            ));
        } else {
            tables.push(Table {
                caption: format!("Op-amp signal levels, {}", Build::ActiveOnParts),
                header: [
                    "op-amp",
                    "peak gain (dB)",
                    "at",
                    "max input (V peak)",
                    "clips first",
                ]
                .map(String::from)
                .to_vec(),
                rows: act
                    .active_on_parts
                    .levels
                    .iter()
                    .map(|l| {
                        vec![
                            l.name.clone(),
                            db(l.peak_gain_db),
                            eng(l.peak_freq_hz, "Hz"),
                            eng(l.max_input_v, "V"),
                            if l.clips_first {
                                "yes".into()
                            } else {
                                String::new()
                            },
                        ]
                    })
                    .collect(),
            });
        }
        notes.extend(
            act.notes
                .iter()
                .map(|n| format!("{}: {n}", Build::ActiveExact)),
        );
        notes.extend(
            act.rescaled
                .iter()
                .map(|n| format!("{}: {n}", Build::ActiveOnParts)),
        );
    }
    let n = &a.noise;
    let st = &a.step;
    if let Some(r) = &n.dynamic_range {
        summary.push((
            format!("{}: dynamic range", Build::ActiveOnParts),
            super::prose::dynamic_range_words(r, n.active_on_parts.input_v_rms),
        ));
    }
    notes.extend(super::summary::payoff_line(d));
    notes.push(format!(
        "{}: largest noise sources {}",
        Build::ActiveOnParts,
        super::prose::sources_words(&n.active_on_parts)
    ));
    notes.push(format!(
        "{}: {}",
        Build::ActiveOnParts,
        super::prose::converter_levels_words(n)
    ));
    notes.extend(super::summary::noise_notes(n));
    notes.extend(super::summary::step_notes(
        st,
        r.active.as_ref().map(|a| a.method),
    ));
    let settle_header: Vec<String> = crate::analysis::SETTLING_FRACTIONS
        .iter()
        .map(|f| format!("settles to {} %", 100.0 * f))
        .chain(
            st.adc_bits
                .map(|bits| format!("settles to half an LSB of {bits} bits")),
        )
        .collect();
    let mut header: Vec<String> = [
        "build",
        "output noise (rms)",
        "referred to the input (rms)",
        "overshoot",
        "rise time (10 to 90 %)",
    ]
    .map(String::from)
    .to_vec();
    header.extend(settle_header);
    tables.push(Table {
        caption: format!(
            "Noise ({}, {} to {}, resistors at {} K) and the response to a 1 V step",
            n.weighting,
            eng(n.band_hz[0], "Hz"),
            eng(n.band_hz[1], "Hz"),
            n.temperature_k
        ),
        header,
        rows: [
            (Build::PassiveIdeal, &n.passive_ideal, &st.passive_ideal),
            (Build::ActiveExact, &n.active_exact, &st.active_exact),
            (
                Build::ActiveOnParts,
                &n.active_on_parts,
                &st.active_on_parts,
            ),
        ]
        .into_iter()
        .map(|(build, noise, step)| {
            let mut row = vec![
                build.to_string(),
                eng(noise.output_v_rms, "V"),
                eng(noise.input_v_rms, "V"),
            ];
            match step {
                Some(step) => {
                    row.push(
                        step.overshoot_pct
                            .map_or("none (no DC output)".to_string(), |o| format!("{o:.3} %")),
                    );
                    row.push(step.rise_time_s.map_or(String::new(), |r| eng(r, "s")));
                    row.extend(step.settling.iter().map(|x| {
                        x.time_s
                            .map_or("beyond the accuracy of the modes".to_string(), |t| {
                                eng(t, "s")
                            })
                    }));
                }
                None => row.push("step response not computed (see the summary)".to_string()),
            }
            row
        })
        .collect(),
    });
    let mut worst: Vec<_> = a.sensitivity.iter().collect();
    worst.sort_by(|x, y| {
        y.passband_worst
            .db_per_percent
            .abs()
            .total_cmp(&x.passband_worst.db_per_percent.abs())
    });
    tables.push(Table {
        caption: format!(
            "Sensitivities of the {} build, dB per % (largest passband effect first)",
            Build::ActiveOnParts
        ),
        header: [
            "designator",
            "parameter",
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
                    extreme(&s.passband_edge),
                    extreme(&s.passband_worst),
                    extreme(&s.stopband_edge),
                ]
            })
            .collect(),
    });
    tables.push(Table {
        caption: "Parts of the passive ideal and the active on parts build".to_string(),
        header: [
            "build",
            "designator",
            "kind",
            "value",
            "series",
            "tolerance",
            "count",
            "stage",
        ]
        .map(String::from)
        .to_vec(),
        rows: bom
            .iter()
            .map(|b| {
                vec![
                    b.build.replace('_', " "),
                    b.designators.join(" "),
                    b.kind.clone(),
                    super::eng::format_trimmed(b.value, &b.unit),
                    b.series.clone().unwrap_or_default(),
                    b.tolerance
                        .map(|t| format!("{} %", factor(100.0 * t)))
                        .unwrap_or_default(),
                    b.quantity.to_string(),
                    b.stage.clone(),
                ]
            })
            .collect(),
    });
    notes.extend(tally(bom).iter().map(|t| {
        format!(
            "{}: {} x {}, spread {}",
            t.build.replace('_', " "),
            t.quantity,
            t.kind,
            factor(t.spread())
        )
    }));
    html_report(&ReportDoc {
        title: format!("nocoil design report: {}", r.design_file),
        summary,
        cautions: CAUTIONS.iter().map(|s| s.to_string()).collect(),
        figures,
        tables,
        notes,
    })
}

//! The charts of a design, as plain [`Chart`] data drawn by
//! [`super::plot`]: magnitude with the specification mask, passband
//! detail, phase, group delay, op-amp levels and the Monte Carlo envelope.
//! Every trace is labelled with the build it belongs to.

use super::eng::format_trimmed as eng;
use super::plot::{Band, Chart, MaskBox, Trace};
use crate::design::{Build, BuildTrace, Documents};

/// How far below the passband level the magnitude charts reach, dB.
const CHART_FLOOR_DB: f64 = 120.0;

/// How far above the passband level the magnitude charts reach, dB.
const CHART_CEILING_DB: f64 = 5.0;

/// The smallest ripple the passband chart is scaled to, dB, so that a
/// Butterworth or a 0.01 dB design still shows its deviations.
const MIN_CHART_RIPPLE_DB: f64 = 0.05;

/// One chart of a design: its file stem, its caption, the chart.
pub struct NamedChart {
    /// File stem ("magnitude").
    pub stem: &'static str,
    /// Caption in the report.
    pub caption: &'static str,
    /// The chart.
    pub chart: Chart,
}

/// The specification mask as shaded boxes.
fn mask_boxes(d: &Documents) -> Vec<MaskBox> {
    d.mask
        .iter()
        .map(|l| MaskBox {
            from_hz: l.from_hz,
            to_hz: l.to_hz,
            min_db: Some(l.min_db).filter(|v| v.is_finite()),
            max_db: Some(l.max_db).filter(|v| v.is_finite()),
        })
        .collect()
}

/// The spread a `[delay]` table allows, drawn over each of its bands as a
/// window of that height centred on the active on parts build's delay
/// (its trace fits the window exactly when it keeps the spread), ms.
fn delay_window(d: &Documents) -> Vec<MaskBox> {
    let Some(figures) = &d.analyses.delay else {
        return Vec::new();
    };
    let v = &figures.active_on_parts;
    let centre_ms = (v.longest_s + v.shortest_s) / 2.0 * 1e3;
    let half_ms = v.max_spread_s / 2.0 * 1e3;
    figures
        .limit
        .bands_hz
        .iter()
        .map(|&[a, b]| MaskBox {
            from_hz: crate::analysis::judged_from_hz([a, b]),
            to_hz: b,
            min_db: Some(centre_ms - half_ms),
            max_db: Some(centre_ms + half_ms),
        })
        .collect()
}

/// The y range of the delay chart: the passive ideal's delay with a
/// quarter of its span to spare on either side (`None`, the data's own
/// span, for a flat or empty trace).
fn delay_range(ms: &[f64]) -> Option<(f64, f64)> {
    let (lo, hi) = ms
        .iter()
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
            (lo.min(v), hi.max(v))
        });
    let spare = 0.25 * (hi - lo);
    (spare > 0.0).then_some((lo - spare, hi + spare))
}

/// Every chart of a design, in the order the report shows them.
pub fn design_charts(d: &Documents) -> Vec<NamedChart> {
    let t = &d.analyses.traces;
    let f = &t.freq_hz;
    let trace = |label: String, values: Vec<f64>, dashed: bool| Trace {
        label,
        x: f.clone(),
        values,
        dashed,
    };
    let three = |pick: &dyn Fn(&BuildTrace) -> Vec<f64>| {
        vec![
            trace(
                Build::PassiveIdeal.to_string(),
                pick(&t.passive_ideal),
                false,
            ),
            trace(Build::ActiveExact.to_string(), pick(&t.active_exact), true),
            // Both active builds dashed, so the passive ideal they are
            // measured against shows through wherever they coincide.
            trace(
                Build::ActiveOnParts.to_string(),
                pick(&t.active_on_parts),
                true,
            ),
        ]
    };
    let base = |title: &str, y: &str| Chart {
        title: title.to_string(),
        x_label: "frequency (Hz)".to_string(),
        y_label: y.to_string(),
        log_x: true,
        ..Chart::default()
    };
    let level = d.report.passband_level_db;
    let ripple = d
        .mask
        .iter()
        .filter(|l| l.min_db.is_finite())
        .map(|l| level - l.min_db)
        .fold(0.0, f64::max)
        .max(MIN_CHART_RIPPLE_DB);
    let pass = d.report.band.passbands_hz(d.view_hz);
    let (plo, phi) = pass
        .iter()
        .fold((f64::INFINITY, 0.0_f64), |(lo, hi), [a, b]| {
            (lo.min(*a), hi.max(*b))
        });
    let magnitude_range = Some((level - CHART_FLOOR_DB, level + CHART_CEILING_DB));
    let gain = |b: &BuildTrace| b.gain_db.clone();
    let delay_ms = |b: &BuildTrace| b.group_delay_s.iter().map(|s| s * 1e3).collect();
    let mc = &d.analyses.montecarlo;
    vec![
        NamedChart {
            stem: "magnitude",
            caption: "Magnitude of the three builds, with the specification mask",
            chart: Chart {
                traces: three(&gain),
                mask: mask_boxes(d),
                y_range: magnitude_range,
                ..base("Magnitude", "gain (dB)")
            },
        },
        NamedChart {
            stem: "passband",
            caption: "Passband detail of the three builds, with the ripple limit",
            chart: Chart {
                traces: three(&gain),
                mask: mask_boxes(d),
                x_range: Some((plo, phi)),
                y_range: Some((level - 2.0 * ripple, level + 0.5 * ripple)),
                ..base("Passband detail", "gain (dB)")
            },
        },
        NamedChart {
            stem: "phase",
            caption: "Phase of the three builds",
            chart: Chart {
                traces: three(&|b: &BuildTrace| b.phase_deg.clone()),
                ..base("Phase", "phase (degrees)")
            },
        },
        NamedChart {
            stem: "delay",
            caption: match d.analyses.delay {
                None => "Group delay of the three builds (exact, not a difference of phases)",
                Some(_) => "Group delay of the three builds (exact, not a difference of phases), with the spread the specification allows centred on the active on parts build's delay",
            },
            chart: match delay_window(d)[..] {
                // Without a delay specification: the whole view, scaled to
                // the passive ideal's delay (near a notch of the active
                // builds, whose zeros sit a hair off the axis, the delay
                // spikes by orders of magnitude, real and clipped at the
                // frame, and would flatten the passband).
                [] => Chart {
                    traces: three(&delay_ms),
                    y_range: delay_range(&delay_ms(&t.passive_ideal)),
                    ..base("Group delay", "delay (ms)")
                },
                // With one: its bands, at the scale of the allowed spread
                // (a few microseconds of spread vanish on the scale of the
                // whole delay curve).
                ref window => Chart {
                    traces: three(&delay_ms),
                    mask: window.to_vec(),
                    x_range: Some(window.iter().fold((f64::INFINITY, 0.0), |(lo, hi), w| {
                        (w.from_hz.min(lo), w.to_hz.max(hi))
                    })),
                    y_range: window.first().and_then(|w| {
                        let (lo, hi) = (w.min_db?, w.max_db?);
                        let spread = hi - lo;
                        Some((lo - 1.5 * spread, hi + 1.5 * spread))
                    }),
                    ..base("Group delay over the delay specification's bands", "delay (ms)")
                },
            },
        },
        NamedChart {
            stem: "levels",
            caption: "Gain from the input to every op-amp output of the active on parts build",
            chart: Chart {
                traces: t
                    .opamp_gain_db
                    .iter()
                    .map(|(n, v)| trace(n.clone(), v.clone(), false))
                    .collect(),
                ..base("Op-amp output levels, active on parts", "gain to output (dB)")
            },
        },
        NamedChart {
            stem: "montecarlo",
            caption: "Monte Carlo envelope of the active on parts build (min, median, max), with the specification mask",
            chart: Chart {
                traces: vec![Trace {
                    label: format!("{}, nominal parts", Build::ActiveOnParts),
                    x: mc.freq_hz.clone(),
                    values: mc.nominal_db.clone(),
                    dashed: true,
                }],
                band: Some(Band {
                    label: format!("{} boards", mc.trials),
                    x: mc.freq_hz.clone(),
                    min: mc.envelope.min_db.clone(),
                    median: mc.envelope.median_db.clone(),
                    max: mc.envelope.max_db.clone(),
                }),
                mask: mask_boxes(d),
                y_range: magnitude_range,
                ..base("Monte Carlo envelope, active on parts", "gain (dB)")
            },
        },
        noise_chart(d),
        step_chart(d),
    ]
    .into_iter()
    // A chart with nothing to draw is left out: a build without op-amps
    // (a first-order passive section) has no output levels.
    .filter(|c| !c.chart.traces.is_empty() || c.chart.band.is_some())
    .collect()
}

/// dB re 1 V/sqrt(Hz) of a density: the noise chart's y axis, whose
/// densities span decades (nV to mV per root hertz).
fn density_db(v: &[f64]) -> Vec<f64> {
    v.iter().map(|d| 20.0 * d.log10()).collect()
}

/// The output noise densities of the three builds and the top sources of
/// the active on parts build.
fn noise_chart(d: &Documents) -> NamedChart {
    let n = &d.analyses.noise.chart;
    let trace = |label: String, values: &[f64], dashed: bool| Trace {
        label,
        x: n.freq_hz.clone(),
        values: density_db(values),
        dashed,
    };
    let mut traces = vec![
        trace(Build::PassiveIdeal.to_string(), &n.passive_ideal, false),
        trace(Build::ActiveExact.to_string(), &n.active_exact, true),
        trace(Build::ActiveOnParts.to_string(), &n.active_on_parts, true),
    ];
    traces.extend(n.top.iter().take(CHART_SOURCES).map(|(name, kind, v)| {
        trace(format!("{}: {name} {kind}", Build::ActiveOnParts), v, false)
    }));
    let noise = &d.analyses.noise;
    NamedChart {
        stem: "noise",
        caption: "Output noise density of the three builds and the three largest sources of the active on parts build (densities unweighted; the integrals in the table are over the band the title names)",
        chart: Chart {
            title: format!(
                "Output noise (integrated {} to {}, {})",
                eng(noise.band_hz[0], "Hz"),
                eng(noise.band_hz[1], "Hz"),
                noise.weighting
            ),
            x_label: "frequency (Hz)".to_string(),
            y_label: "noise density (dB re 1 V/sqrt(Hz))".to_string(),
            log_x: true,
            traces,
            ..Chart::default()
        },
    }
}

/// Sources of the build on parts drawn beside the three builds' totals.
const CHART_SOURCES: usize = 3;

/// The responses of the three builds to a 1 V step.
fn step_chart(d: &Documents) -> NamedChart {
    let s = &d.analyses.step.chart;
    // The unit that keeps the axis's numbers between 1 and 1000.
    let end = s.time_s.last().copied().unwrap_or(0.0);
    let (scale, unit) = match end {
        e if e < 1e-3 => (1e6, "us"),
        e if e < 1.0 => (1e3, "ms"),
        _ => (1.0, "s"),
    };
    let ms: Vec<f64> = s.time_s.iter().map(|t| t * scale).collect();
    let trace = |build: Build, values: &[f64], dashed: bool| Trace {
        label: build.to_string(),
        x: ms.clone(),
        values: values.to_vec(),
        dashed,
    };
    NamedChart {
        stem: "step",
        caption: "Response of the three builds to a 1 V step at the input, to one and a half times the longest settling to 0.1 % (the finer settling times are in the table)",
        chart: Chart {
            title: "Step response".to_string(),
            x_label: format!("time ({unit})"),
            y_label: "output (V)".to_string(),
            log_x: false,
            // A build without a step response (all NaN) is left out.
            traces: [
                trace(Build::PassiveIdeal, &s.passive_ideal, false),
                trace(Build::ActiveExact, &s.active_exact, true),
                trace(Build::ActiveOnParts, &s.active_on_parts, true),
            ]
            .into_iter()
            .filter(|t| t.values.iter().any(|v| v.is_finite()))
            .collect(),
            ..Chart::default()
        },
    }
}

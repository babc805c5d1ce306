//! Tables of one analysis each, as CSV for programs and as text for
//! people: sensitivities, op-amp levels, the Monte Carlo envelope and
//! yield, the minimum orders of a mask. Each CSV states the build its
//! figures belong to in its header or its column names.

use super::csv::{series_csv, sweep_csv, CsvError};
use super::prose::db;
use crate::analysis::{MonteCarloResult, OpAmpLevel, Parameter, SensitivitySummary};
use crate::approx::ApproxError;
use crate::design::{Build, NoiseFigures, OrderTable, StepReport};
use crate::spec::as_written;
use std::fmt::Write as _;

/// Sensitivities of `build` as CSV: designator, quantity, and dB per %
/// with its frequency at the passband edge, the passband's worst point
/// and the stopband edge.
pub fn sensitivity_csv(build: Build, rows: &[SensitivitySummary]) -> String {
    let mut s = String::from("build,designator,parameter,edge_db_per_percent,edge_hz,passband_worst_db_per_percent,passband_worst_hz,stopband_db_per_percent,stopband_hz\n");
    let build = crate::spec::as_written(&build);
    for r in rows {
        let q = match r.parameter {
            Parameter::Value => "value",
            Parameter::GainBandwidth => "gbw",
        };
        // A group whose output vanished everywhere has no extreme: empty
        // cells (see analysis::Extreme::found).
        let cells = |e: &crate::analysis::Extreme| match e.found() {
            true => format!("{:.6e},{:.6e}", e.db_per_percent, e.freq_hz),
            false => ",".to_string(),
        };
        let _ = writeln!(
            s,
            "{build},{},{q},{},{},{}",
            r.name,
            cells(&r.passband_edge),
            cells(&r.passband_worst),
            cells(&r.stopband_edge)
        );
    }
    s
}

/// Op-amp levels of `build` as CSV: designator, peak gain and its
/// frequency, the largest input for the swing, and whether it clips
/// first.
pub fn levels_csv(build: Build, levels: &[OpAmpLevel]) -> String {
    let mut s =
        String::from("build,designator,peak_gain_db,peak_hz,max_input_v_peak,clips_first\n");
    let build = crate::spec::as_written(&build);
    for l in levels {
        let _ = writeln!(
            s,
            "{build},{},{:.6},{:.6e},{:.6},{}",
            l.name, l.peak_gain_db, l.peak_freq_hz, l.max_input_v, l.clips_first
        );
    }
    s
}

/// The envelope of a Monte Carlo run of the active on parts build as
/// CSV: the frequency, then the nominal, lowest, median and highest gain
/// of the trials, each column named with the build.
pub fn envelope_csv(r: &MonteCarloResult) -> String {
    let mut s = String::from("freq_hz,active_on_parts_nominal_gain_db,active_on_parts_min_gain_db,active_on_parts_median_gain_db,active_on_parts_max_gain_db\n");
    for i in 0..r.freq_hz.len() {
        let _ = writeln!(
            s,
            "{:.9e},{:.6},{:.6},{:.6},{:.6}",
            r.freq_hz[i],
            r.nominal_db[i],
            r.envelope.min_db[i],
            r.envelope.median_db[i],
            r.envelope.max_db[i]
        );
    }
    s
}

/// The run's account in words: yield and the worst trials, each with the
/// limit it came closest to (or broke) and where; `level_db` is the
/// passband level the limits are read against; `shortened_for` is the
/// build's op-amp count when the default count was shortened for it (see
/// [`crate::design::default_trials`]); `tuned` when every board was tuned
/// by the tuning procedure.
pub fn yield_summary(
    r: &MonteCarloResult,
    seed: u64,
    shortened_for: Option<usize>,
    level_db: f64,
    tuned: bool,
) -> String {
    let trials = r.trials;
    let interval = crate::design::interval_95(r);
    let mut s = format!(
        "Monte Carlo: {trials} trials, seed {seed}: yield {:.2} % ({} passed{}): boards of the {} build meeting the specification{}; 95 % interval {:.1} % to {:.1} %\n",
        100.0 * r.yield_fraction,
        r.passed,
        unstable_words(r),
        Build::ActiveOnParts,
        match tuned {
            true => ", each tuned by the tuning procedure",
            false => "",
        },
        100.0 * interval[0],
        100.0 * interval[1],
    );
    if let Some(opamps) = shortened_for {
        let _ = writeln!(s, "  {}", super::prose::shortened_default(trials, opamps));
    }
    for t in &r.worst {
        let spread = t
            .delay_spread_s
            .map(|d| {
                format!(
                    ", group delay spread {}",
                    super::eng::format_trimmed(d, "s")
                )
            })
            .unwrap_or_default();
        let _ = writeln!(
            s,
            "  trial {:>7}: margin {} dB to the specification at {} ({}), largest deviation from the nominal build {} dB{spread}{}",
            t.trial,
            db(t.margin_db),
            super::eng::format_trimmed(t.at_hz, "Hz"),
            super::prose::bound_words(t.gain_db, t.limit_db, t.lower_bound, level_db),
            db(t.max_deviation_db),
            match (t.passed, t.stable, t.delay_ok) {
                (true, _, _) => "",
                (false, false, _) => "  FAILS: UNSTABLE",
                (false, true, false) => "  FAILS: group delay spread",
                (false, true, true) => "  FAILS",
            }
        );
    }
    s
}

/// "; 12 unstable, counted as failed" when some trials were unstable,
/// else nothing.
pub fn unstable_words(r: &MonteCarloResult) -> String {
    let unstable = match r.unstable {
        0 => String::new(),
        n => format!("; {n} unstable, counted as failed"),
    };
    let delay = match r.delay_failed {
        0 => String::new(),
        n => format!("; {n} over the group delay spread allowed"),
    };
    unstable + &delay
}

/// The minimum orders of a mask, one family a line.
pub fn order_text(t: &OrderTable) -> String {
    let mut s = format!(
        "minimum order (normalized stopband edge {} rad/s)\n",
        super::prose::factor(t.normalized_stopband_rad_s)
    );
    for row in &t.rows {
        // The design-file spelling, to copy into `filter.family`.
        let name = crate::spec::as_written(&row.family);
        let _ = match &row.order {
            Ok(n) if row.no_ladder => writeln!(
                s,
                "  {name:<NAME_WIDTH$} {n} (no ladder of this order has positive elements at this floor: a deeper floor allows higher orders, or take the elliptic)"
            ),
            Ok(n) if *n <= row.synthesis_max_order => writeln!(s, "  {name:<NAME_WIDTH$} {n}"),
            // Beyond the synthesis (or the approximation) the order the
            // mask needs is still worth knowing.
            Ok(n) => too_high(&mut s, &name, *n as f64, row.synthesis_max_order),
            Err(ApproxError::OrderTooHigh { needed, .. }) => {
                too_high(&mut s, &name, needed.ceil(), row.synthesis_max_order)
            }
            Err(e) => writeln!(s, "  {name:<NAME_WIDTH$} none: {e}"),
        };
    }
    s
}

/// One line of [`order_text`] for an order beyond what the synthesis
/// holds.
fn too_high(s: &mut String, name: &str, needed: f64, max: usize) -> std::fmt::Result {
    writeln!(
        s,
        "  {name:<NAME_WIDTH$} {needed} (above {max}, the highest order its ladder synthesis holds: move the stopband edge away from the passband, or lower the attenuation)"
    )
}

/// The width of the family column: the longest design-file name,
/// "inverse_chebyshev", and a space.
const NAME_WIDTH: usize = 18;

/// Output noise densities as CSV: `freq_hz`, the passive ideal, the
/// active exact and the active on parts builds (V/sqrt(Hz)), then one
/// column per top source of the active on parts build, named
/// `active_on_parts_<designator>_<kind>_v_per_rthz`.
pub fn noise_csv(n: &NoiseFigures) -> Result<String, CsvError> {
    let c = &n.chart;
    let names: Vec<String> = c
        .top
        .iter()
        .map(|(name, kind, _)| {
            format!(
                "{}_{name}_{}_v_per_rthz",
                as_written(&Build::ActiveOnParts),
                as_written(kind)
            )
        })
        .collect();
    let builds = [
        (Build::PassiveIdeal, &c.passive_ideal),
        (Build::ActiveExact, &c.active_exact),
        (Build::ActiveOnParts, &c.active_on_parts),
    ];
    let build_names: Vec<String> = builds
        .iter()
        .map(|(b, _)| format!("{}_v_per_rthz", as_written(b)))
        .collect();
    let mut columns: Vec<(&str, &[f64])> = builds
        .iter()
        .zip(&build_names)
        .map(|((_, v), name)| (name.as_str(), v.as_slice()))
        .collect();
    columns.extend(
        c.top
            .iter()
            .zip(&names)
            .map(|((_, _, v), name)| (name.as_str(), v.as_slice())),
    );
    sweep_csv(&c.freq_hz, &columns)
}

/// Step responses as CSV: `time_s`, then the passive ideal, the active
/// exact and the active on parts outputs for a 1 V step at the input.
pub fn step_csv(s: &StepReport) -> Result<String, CsvError> {
    let c = &s.chart;
    let names: Vec<String> = [
        Build::PassiveIdeal,
        Build::ActiveExact,
        Build::ActiveOnParts,
    ]
    .iter()
    .map(|b| format!("{}_v", as_written(b)))
    .collect();
    series_csv(
        "time_s",
        &c.time_s,
        &[
            (&names[0], &c.passive_ideal),
            (&names[1], &c.active_exact),
            (&names[2], &c.active_on_parts),
        ],
    )
}

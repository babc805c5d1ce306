//! The summary `nocoil design` prints: first whether the active on parts
//! build (what is soldered) meets the specification, then the three
//! builds, each figure labelled with the build it belongs to.

use super::eng::format_trimmed as eng;
use super::prose::{
    bound_words, converter_levels_words, db, dynamic_range_words, edge_loss_name, level_warnings,
    noise_words, opamp_model, percent, scale_words, sources_words, step_words, trim_goal_words,
    tuning_heading, tuning_step_words,
};
use crate::active::Method;
use crate::analysis::{DelayVerdict, MaskVerdict, EDGE_WINDOW};
use crate::design::{
    ActiveReport, Build, BuildFigures, Documents, NoiseFigures, Report, StepReport,
};
use std::fmt::Write as _;

/// The edges of a band as "3 kHz" or "300 Hz and 3.4 kHz".
pub fn edges(hz: &[f64]) -> String {
    hz.iter()
        .map(|f| eng(*f, "Hz"))
        .collect::<Vec<_>>()
        .join(" and ")
}

/// One line on a build against the specification, in the designer's
/// terms: the loss in the passband or the attenuation in the stopband,
/// both measured from the report's passband level (the terminations'
/// divider), against what the specification allows or asks.
pub fn verdict_line(
    build: Build,
    v: &MaskVerdict,
    delay: Option<&DelayVerdict>,
    r: &Report,
) -> String {
    let bound = bound_words(v.gain_db, v.limit_db, v.lower_bound, r.passband_level_db);
    // Below the view only a lowpass's DC end is judged (Design::dc_reach_hz).
    let at = match v.at_hz < r.band.view_hz().0 {
        true => format!("{}, toward DC", eng(v.at_hz, "Hz")),
        false => eng(v.at_hz, "Hz"),
    };
    let delay_words = delay
        .map(|d| format!("; {}", spread_words(d)))
        .unwrap_or_default();
    match (v.meets, delay) {
        (true, Some(d)) if !d.meets => format!(
            "{build}: FAILS the specification on group delay: {} (the gain meets it with {} dB to spare)",
            spread_words(d),
            db(v.margin_db)
        ),
        (true, _) => format!(
            "{build}: meets the specification with {} dB to spare (closest at {at}: {bound}){delay_words}",
            db(v.margin_db),
        ),
        (false, _) => format!(
            "{build}: FAILS the specification by {} dB at {at} ({bound}){delay_words}",
            db(-v.margin_db),
        ),
    }
}

/// A build's group-delay spread against its bound, in words.
pub fn spread_words(d: &DelayVerdict) -> String {
    format!(
        "group delay spread {} ({} allowed; longest {} at {}, shortest {} at {})",
        eng(d.spread_s, "s"),
        eng(d.max_spread_s, "s"),
        eng(d.longest_s, "s"),
        eng(d.longest_at_hz, "Hz"),
        eng(d.shortest_s, "s"),
        eng(d.shortest_at_hz, "Hz")
    )
}

/// The yield line of the summary and the report.
pub fn yield_line(d: &Documents) -> String {
    let mc = &d.analyses.montecarlo;
    let shortened = d
        .report
        .outcome
        .as_ref()
        .and_then(|o| o.boards_shortened_for_opamps)
        .map(|opamps| format!("; {}", super::prose::shortened_default(mc.trials, opamps)))
        .unwrap_or_default();
    let interval = |r: &crate::analysis::MonteCarloResult| {
        let [lo, hi] = crate::design::interval_95(r);
        format!("95 % interval {:.1} % to {:.1} %", 100.0 * lo, 100.0 * hi)
    };
    let (tuned, before) = match &d.analyses.before_tuning {
        Some(b) => (
            " after tuning",
            format!(
                "; {:.2} % before tuning ({})",
                100.0 * b.yield_fraction,
                interval(b)
            ),
        ),
        None => ("", String::new()),
    };
    format!(
        "{}: yield {:.2} %{tuned} ({}; {} of {} boards meet the specification with the parts' tolerances and the op-amps' GBW spread{}{before}; Monte Carlo seed {}{shortened})",
        Build::ActiveOnParts,
        100.0 * mc.yield_fraction,
        interval(mc),
        mc.passed,
        mc.trials,
        super::tables::unstable_words(mc),
        d.seed
    )
}

/// Where precision pays: the yield of the same boards with one class's
/// tolerance halved at a time; `None` without a payoff to show.
pub fn payoff_line(d: &Documents) -> Option<String> {
    let payoffs = &d.analyses.payoffs;
    if payoffs.is_empty() {
        return None;
    }
    let pct = |x: f64| format!("{}", 100.0 * x);
    let classes: Vec<String> = payoffs
        .iter()
        .map(|p| {
            let (from, to) = match p.class {
                crate::design::PartClass::OpAmpGbw => (
                    format!("+-{} %", pct(p.tolerance)),
                    format!("+-{} %", pct(p.halved_tolerance)),
                ),
                _ => (
                    format!("{} %", pct(p.tolerance)),
                    format!("{} %", pct(p.halved_tolerance)),
                ),
            };
            format!(
                "{} {from} -> {to}: {:.2} %",
                p.class,
                100.0 * p.yield_fraction
            )
        })
        .collect();
    // With the nominal board failing, a tolerance only decides how many
    // boards stray to the passing side: halving one can lower the yield.
    let nominal = match d.analyses.active_on_parts_verdict.meets {
        true => "",
        false => " (the board with nominal parts fails the specification, so no tolerance alone can carry the yield: the design itself must gain margin)",
    };
    Some(format!(
        "{}: yield of the same boards with one tolerance halved: {}{nominal}",
        Build::ActiveOnParts,
        classes.join("; ")
    ))
}

/// The figures of one build against the passive ideal, one line each.
fn figures(s: &mut String, build: Build, f: &BuildFigures, act: &ActiveReport, prewidened: bool) {
    let as_synthesized = if prewidened { " as synthesized" } else { "" };
    let (bias_current_a, swing_v) = (act.bias_current_a, act.swing_v_peak);
    let c = &f.comparison;
    let _ = writeln!(
        s,
        "  {build}: largest passband deviation from the passive ideal {} dB",
        db(c.passband_deviation_db)
    );
    if let Some(top) = &f.top_of_range {
        let _ = writeln!(s, "  {build}: {}", super::prose::top_of_range(top));
    }
    for ((e, a), p) in c
        .passband_edge_hz
        .iter()
        .zip(&c.edge_hz)
        .zip(&c.edge_shift_percent)
    {
        match (a, p) {
            (Some(a), Some(p)) => {
                let _ = writeln!(
                    s,
                    "  {build}: passband edge{as_synthesized} {} moves to {} ({})",
                    eng(*e, "Hz"),
                    eng(*a, "Hz"),
                    percent(*p)
                );
            }
            _ => {
                let _ = writeln!(
                    s,
                    "  {build}: passband edge{as_synthesized} {}: no crossing within {} % of it",
                    eng(*e, "Hz"),
                    super::prose::factor(100.0 * (EDGE_WINDOW - 1.0))
                );
            }
        }
    }
    for (f, g) in c.stopband_edge_hz.iter().zip(&c.stopband_edge_gain_db) {
        let _ = writeln!(
            s,
            "  {build}: attenuation {} dB at the stopband edge {}",
            db(-g),
            eng(*f, "Hz")
        );
    }
    if let Some(top) = f.highest_level() {
        let _ = writeln!(
            s,
            "  {build}: largest gain to an op-amp output {} dB at {} ({}): {} peak at the input drives it to the swing",
            db(top.peak_gain_db),
            eng(top.peak_freq_hz, "Hz"),
            top.name,
            eng(top.max_input_v, "V")
        );
    } else {
        let _ = writeln!(s, "  {build}: {}", super::prose::NO_OPAMPS);
    }
    if !f.levels.is_empty() {
        let _ = writeln!(
            s,
            "  {build}: {}",
            super::prose::bias_words(bias_current_a, f.bias.as_ref(), swing_v)
        );
    }
}

/// The passive ideal: prototype, ladder and elements.
fn passive(s: &mut String, r: &Report) {
    let what = match (r.family, &r.prototype_table) {
        (Some(f), _) => f.to_string(),
        (None, Some(t)) => format!("table {t}"),
        (None, None) => "table".to_string(),
    };
    let _ = writeln!(
        s,
        "{what} {}, order {} ({})",
        r.kind, r.order, r.order_choice
    );
    let variant = r
        .variant
        .map_or("tabulated ladder".to_string(), |v| v.to_string());
    let series_first = match r.form {
        crate::synth::Form::MinCapacitor => "series inductor first",
        crate::synth::Form::MinInductor => "shunt capacitor first",
    };
    let _ = writeln!(s, "  {variant}; {} ladder ({series_first})", r.form);
    let scale = r
        .frequency_scale
        .map(|f| format!(" ({})", scale_words(f)))
        .unwrap_or_default();
    let _ = writeln!(
        s,
        "  passband edge {}, {} {} dB{scale}",
        edges(&r.band.passband_edges_hz()),
        edge_loss_name(r.family),
        db(r.passband_ripple_db)
    );
    if let Some(words) = super::search::margins_words(r) {
        let _ = writeln!(s, "  {words}");
    }
    let stop = r.band.stopband_edges_hz();
    if let (false, Some(a)) = (stop.is_empty(), r.stopband_attenuation_db) {
        let reached = r
            .mask
            .gain_at_stopband_edge_db
            .map(|g| {
                format!(
                    ", {} dB reached there by the {}",
                    db(-g),
                    Build::PassiveIdeal
                )
            })
            .unwrap_or_default();
        let _ = writeln!(
            s,
            "  stopband edge {}, attenuation {} dB asked{reached}",
            edges(&stop),
            db(a)
        );
    }
    if r.mask.meets_mask == Some(false) {
        let _ = writeln!(
            s,
            "  WARNING: the given order does not meet the stopband mask; raise filter.order or leave it out to have it computed"
        );
    }
    if let Some(at) = &r.realized_stopband_edge_hz {
        let _ = writeln!(
            s,
            "  {}: attenuation first reached at {}",
            Build::PassiveIdeal,
            edges(at)
        );
    }
    let _ = writeln!(
        s,
        "  terminations: source {}, load {}",
        eng(r.source_ohm, "ohm"),
        eng(r.load_ohm, "ohm")
    );
    let _ = writeln!(s, "  {}", r.level);
    for w in level_warnings(&r.level) {
        let _ = writeln!(s, "  {w}");
    }
    let _ = writeln!(
        s,
        "normalized prototype (1 ohm source, 1 rad/s edge), load {} ohm:",
        super::prose::factor(r.normalized_load_ohm)
    );
    for e in &r.normalized_elements {
        let unit = match e.kind {
            crate::synth::Reactance::Inductor => "H",
            crate::synth::Reactance::Capacitor => "F",
        };
        let _ = writeln!(
            s,
            "  arm {:<3} {:<6} {} {unit}",
            e.arm,
            e.arm_kind.to_string(),
            super::prose::factor(e.value)
        );
    }
    let _ = writeln!(s, "{}:", Build::PassiveIdeal);
    for e in &r.passive_ideal_elements {
        let _ = writeln!(
            s,
            "  {:<5} {:<5} {:<5} {}",
            e.designator,
            e.nodes[0],
            e.nodes[1],
            eng(e.value, e.unit)
        );
    }
}

/// The whole summary of a designed filter.
/// The summary of a design whose active build was refused (`why`, the
/// refusal in words): that first, then the passive ideal.
pub fn passive_summary(r: &Report, why: &str) -> String {
    let mut s = format!(
        "{}: none: {why}\nthe {} alone is written (passive.cir, report.json)\n",
        Build::ActiveExact,
        Build::PassiveIdeal
    );
    passive(&mut s, r);
    s
}

/// The summary of a design with its active builds.
pub fn summary(d: &Documents) -> String {
    let r = &d.report;
    let a = &d.analyses;
    let mut s = String::new();
    let delay = a.delay.as_ref();
    let _ = writeln!(
        s,
        "{}",
        verdict_line(
            Build::ActiveOnParts,
            &a.active_on_parts_verdict,
            delay.map(|d| &d.active_on_parts),
            r
        )
    );
    if let Some(line) = r.active.as_ref().and_then(|act| {
        super::prose::bias_warning(act.active_on_parts.bias.as_ref(), act.swing_v_peak)
    }) {
        let _ = writeln!(s, "{line}");
    }
    let _ = writeln!(s, "{}", yield_line(d));
    if let Some(search) = &r.yield_search {
        let _ = writeln!(s, "{}", super::search::search_words(search));
    }
    let _ = writeln!(
        s,
        "{}",
        verdict_line(
            Build::ActiveExact,
            &a.active_exact_verdict,
            delay.map(|d| &d.active_exact),
            r
        )
    );
    if let Some(line) = payoff_line(d) {
        let _ = writeln!(s, "{line}");
    }
    if let Some(line) = super::search::next_step_words(r) {
        let _ = writeln!(s, "{line}");
    }
    if let Some(d) = delay {
        let _ = writeln!(
            s,
            "{}: {}",
            Build::PassiveIdeal,
            spread_words(&d.passive_ideal)
        );
        let bands: Vec<String> = d
            .limit
            .bands_hz
            .iter()
            .map(|&[a, b]| format!("{} to {}", eng(a, "Hz"), eng(b, "Hz")))
            .collect();
        let _ = writeln!(s, "  group delay judged over {}", bands.join(" and "));
    }
    passive(&mut s, r);
    let Some(act) = &r.active else {
        return s;
    };
    let stability = super::prose::stability(act);
    let _ = writeln!(
        s,
        "{}: {}, {} op-amps, {} capacitors (spread {}), {}: {stability}",
        Build::ActiveExact,
        act.method,
        act.opamps,
        act.capacitors,
        super::prose::factor(act.capacitor_spread),
        opamp_model(&act.opamp)
    );
    let _ = writeln!(s, "  why: {}", act.why);
    let prewidened = r.margins.edge_scale != 1.0;
    figures(
        &mut s,
        Build::ActiveExact,
        &act.active_exact,
        act,
        prewidened,
    );
    figures(
        &mut s,
        Build::ActiveOnParts,
        &act.active_on_parts,
        act,
        prewidened,
    );
    let e = &act.parts_error_db;
    let _ = writeln!(
        s,
        "  {}: passband deviation from the passive ideal {} dB after rescaling, {} dB on preferred values, {} dB trimmed",
        Build::ActiveOnParts,
        db(e.ideal_values),
        db(e.snapped),
        db(e.trimmed)
    );
    for t in &act.trims {
        let trimmer = crate::realize::trimmer_designator(&t.element);
        let _ = writeln!(
            s,
            "  trim {} (converter for {}): {} = {} fixed + {} trimmer {trimmer} set to {} ({})",
            t.element,
            t.stage,
            eng(t.value_ohm, "ohm"),
            eng(t.fixed_ohm, "ohm"),
            eng(t.pot_ohm, "ohm"),
            eng(t.setting_ohm, "ohm"),
            trim_goal_words(&t.goal, &trimmer, &act.tuning_procedure)
        );
    }
    let _ = writeln!(
        s,
        "  {}: {}",
        Build::ActiveOnParts,
        tuning_heading(act.tuning_procedure.len())
    );
    for (k, step) in act.tuning_procedure.iter().enumerate() {
        let _ = writeln!(s, "    {}. {}", k + 1, tuning_step_words(step));
    }
    for n in &act.notes {
        let _ = writeln!(s, "  {}: note: {n}", Build::ActiveExact);
    }
    for n in &act.rescaled {
        let _ = writeln!(s, "  {}: note: {n}", Build::ActiveOnParts);
    }
    dynamics(&mut s, d);
    s
}

/// Noise, dynamic range and step response of the three builds.
pub fn dynamics(s: &mut String, d: &Documents) {
    s.push_str(&noise_text(&d.analyses.noise));
    s.push_str(&step_text(
        &d.analyses.step,
        d.report.active.as_ref().map(|a| a.method),
    ));
}

/// The noise of the three builds and the dynamic range, as
/// `nocoil noise` prints it.
pub fn noise_text(n: &NoiseFigures) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "noise ({}, {} to {}, resistors at {} K; {}):",
        n.weighting,
        eng(n.band_hz[0], "Hz"),
        eng(n.band_hz[1], "Hz"),
        n.temperature_k,
        opamp_noise_words(n)
    );
    for (build, b) in [
        (Build::PassiveIdeal, &n.passive_ideal),
        (Build::ActiveExact, &n.active_exact),
        (Build::ActiveOnParts, &n.active_on_parts),
    ] {
        let _ = writeln!(s, "  {build}: {}", noise_words(b));
    }
    let _ = writeln!(
        s,
        "  {}: largest sources {}",
        Build::ActiveOnParts,
        sources_words(&n.active_on_parts)
    );
    if let Some(r) = &n.dynamic_range {
        let _ = writeln!(
            s,
            "  {}: {}",
            Build::ActiveOnParts,
            dynamic_range_words(r, n.active_on_parts.input_v_rms)
        );
    }
    let _ = writeln!(
        s,
        "  {}: {}",
        Build::ActiveOnParts,
        converter_levels_words(n)
    );
    for note in noise_notes(n) {
        let _ = writeln!(s, "  {note}");
    }
    s
}

/// The op-amps' noise, slew rate and output current, saying which are
/// the default's (an assumption of this project's, not a part's data).
fn opamp_noise_words(n: &NoiseFigures) -> String {
    let o = &n.opamp;
    let assumed: Vec<&str> = [
        (n.noise_assumed, "noise"),
        (n.slew_assumed, "slew rate"),
        (n.current_assumed, "output current"),
    ]
    .into_iter()
    .filter_map(|(a, what)| a.then_some(what))
    .collect();
    let default = match assumed.len() {
        0 => String::new(),
        3 => ", the default op-amp's: an assumption, give the data sheet's in [opamp]".to_string(),
        _ => format!(
            "; the {} {} the default op-amp's: an assumption, give the data sheet's in [opamp]",
            assumed.join(" and "),
            if assumed.len() == 1 { "is" } else { "are" }
        ),
    };
    format!(
        "op-amps {}/sqrt(Hz) (1/f corner {}), {}/sqrt(Hz) (corner {}), slew rate {}/us, output current {}{default}",
        eng(o.en_v_per_rthz, "V"),
        eng(o.en_corner_hz, "Hz"),
        eng(o.in_a_per_rthz, "A"),
        eng(o.in_corner_hz, "Hz"),
        eng(n.slew_v_per_s * 1e-6, "V"),
        eng(n.output_current_a, "A"),
    )
}

/// The notes on the noise figures, each naming its build: an active
/// build much noisier than the passive ideal, a dynamic range below the
/// `[adc] bits` converter's, an input limit above the op-amps' swing.
pub fn noise_notes(n: &NoiseFigures) -> Vec<String> {
    let mut notes = Vec::new();
    let excess = 20.0 * (n.active_on_parts.output_v_rms / n.passive_ideal.output_v_rms).log10();
    if excess > NOISIER_DB {
        notes.push(format!(
            "{}: note: {} dB noisier than the passive ideal (whose only noise is its terminations')",
            Build::ActiveOnParts,
            db(excess)
        ));
    }
    if let (Some(r), Some(bits)) = (&n.dynamic_range, n.adc_bits) {
        // A full-scale sine over an ideal N-bit quantizer's noise: 6.02 N
        // + 1.76 dB (common practice).
        let converter_db = 6.02 * f64::from(bits) + 1.76;
        if r.range_db < converter_db {
            notes.push(format!(
                "{}: note: the dynamic range, {} dB, is below the {} dB of an ideal {bits}-bit converter: the filter's noise, not the converter's, sets the floor",
                Build::ActiveOnParts,
                db(r.range_db),
                db(converter_db)
            ));
        }
    }
    if let Some(r) = &n.dynamic_range {
        if r.max_input_v_peak > n.swing_v_peak {
            notes.push(format!(
                "{}: note: the largest input, {} peak, is beyond the op-amps' own swing ({} peak): whatever drives the filter clips first",
                Build::ActiveOnParts,
                eng(r.max_input_v_peak, "V"),
                eng(n.swing_v_peak, "V")
            ));
        }
    }
    notes
}

/// The step responses of the three builds, as `nocoil step` prints them;
/// `method` is how the inductors were removed (for the reason of a slow
/// tail).
pub fn step_text(st: &StepReport, method: Option<Method>) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "step response to 1 V at the input:");
    for (build, f) in [
        (Build::PassiveIdeal, &st.passive_ideal),
        (Build::ActiveExact, &st.active_exact),
        (Build::ActiveOnParts, &st.active_on_parts),
    ] {
        match f {
            Some(f) => {
                let _ = writeln!(s, "  {build}: {}", step_words(f, st.adc_bits));
            }
            None => {
                let why = st
                    .not_computed
                    .iter()
                    .find(|n| n.build == build)
                    .map_or("", |n| n.reason.as_str());
                let _ = writeln!(s, "  {build}: not computed ({why})");
            }
        }
    }
    for note in step_notes(st, method) {
        let _ = writeln!(s, "  {note}");
    }
    s
}

/// The notes on the step responses: a build on parts whose DC gain is
/// off the passive ideal's, or that settles much later.
pub fn step_notes(st: &StepReport, method: Option<Method>) -> Vec<String> {
    let mut notes = Vec::new();
    let (Some(parts), Some(ideal)) = (&st.active_on_parts, &st.passive_ideal) else {
        return notes;
    };
    let (dc_parts, dc_ideal) = (parts.final_v, ideal.final_v);
    if dc_parts != 0.0 && dc_ideal != 0.0 {
        let off_db = 20.0 * (dc_parts / dc_ideal).abs().log10();
        if off_db.abs() > DC_OFF_DB {
            notes.push(format!(
                "{}: note: its DC gain is {} dB off the passive ideal's (a final value of {} against {}): a path the active build adds or loses at DC",
                Build::ActiveOnParts,
                db(off_db),
                eng(dc_parts, "V"),
                eng(dc_ideal, "V")
            ));
        }
    }
    // The finest band both builds placed.
    let last = parts.settling.len().saturating_sub(1);
    let finest = parts
        .settling
        .iter()
        .zip(&ideal.settling)
        .enumerate()
        .filter_map(|(k, (a, b))| Some((k, a.fraction, a.time_s?, b.time_s?)))
        .next_back();
    if let Some((k, fraction, slow, fast)) = finest {
        let ratio = slow / fast;
        if ratio > SLOWER_FACTOR {
            notes.push(format!(
                "{}: note: settles to {} {} times later than the passive ideal: a slow mode the active build adds{}",
                Build::ActiveOnParts,
                super::prose::band_words(fraction, st.adc_bits.filter(|_| k == last)),
                super::prose::factor(ratio),
                match method {
                    Some(Method::Fdnr) => " (an FDNR build's DC-path resistors across the termination capacitors, with those capacitors, make a pole near DC)",
                    _ => "",
                }
            ));
        }
    }
    notes
}

/// An active build this much noisier than the passive ideal gets a note,
/// dB: its op-amps and converter resistors, not the terminations, set
/// the noise floor.
const NOISIER_DB: f64 = 6.0;

/// A build on parts whose DC gain is this far off the passive ideal's
/// gets a note, dB: the specification is judged from the view's lower
/// end, and a step response shows what happens below it.
const DC_OFF_DB: f64 = 0.1;

/// An active build settling this many times later than the passive ideal
/// gets a note.
const SLOWER_FACTOR: f64 = 1.5;

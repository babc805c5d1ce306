//! The one place where the stages' typed reasons and notes become words:
//! every renderer (the printed summary, the HTML report) shows them
//! through these [`std::fmt::Display`] implementations, so a note reads
//! the same wherever it appears. Values are in engineering notation
//! ([`crate::export::eng`]).

use super::eng::{format_trimmed as eng, HUMAN_DIGITS};
use crate::active::{CornerVerdict, Method, NaturalFrequency, Note, Why};
use crate::analysis::BiasOffsets;
use crate::approx::Family;
use crate::circuit::OpAmpModel;
use crate::design::{ActiveReport, Margin, OrderChoice, TopOfRange, TOP_OF_RANGE};
use crate::parts::ImpedanceLevel;
use crate::realize::{
    Arm, LadderLevel, Moved, Reading, Rescale, TrimGoal, TuningStep, TRIMMER_RESOLUTION,
};
use crate::spec::FrequencyScale;
use std::fmt::{self, Display, Formatter};

/// A dB figure as a designer writes it: at most four decimals, no
/// trailing zeros, no negative zero ("70", "0.1", "0.0117").
pub fn db(x: f64) -> String {
    let s = format!("{x:.4}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    match s.strip_prefix('-') {
        Some("0") => "0".to_string(),
        _ => s.to_string(),
    }
}

/// A sensitivity (dB per %) with five decimals and its sign; one that
/// rounds to zero is written "0" rather than "-0.00000".
pub fn signed(x: f64) -> String {
    let s = format!("{x:+.5}");
    if s[1..].chars().all(|c| c == '0' || c == '.') {
        "0".to_string()
    } else {
        s
    }
}

/// A percentage with three decimals and its sign, no negative zero.
pub fn percent(x: f64) -> String {
    let s = format!("{x:+.3}");
    if s.trim_start_matches(['+', '-'])
        .chars()
        .all(|c| c == '0' || c == '.')
    {
        format!("{} %", s.trim_start_matches(['+', '-']))
    } else {
        format!("{s} %")
    }
}

/// A damping ratio: four significant digits, scientific below 1e-3.
pub fn damping(zeta: f64) -> String {
    match zeta.abs() < 1e-3 && zeta != 0.0 {
        true => format!("{zeta:.3e}"),
        false => format!("{zeta:.4}"),
    }
}

/// A factor (a ratio of values) with [`HUMAN_DIGITS`] significant
/// digits, trailing zeros dropped; a power of ten written out beyond
/// 1e-3 to 1e4, where plain digits stop being readable.
pub fn factor(x: f64) -> String {
    if !x.is_finite() || x == 0.0 {
        return format!("{x}");
    }
    let magnitude = x.abs().log10().floor() as i32;
    if !(-3..4).contains(&magnitude) {
        let s = format!("{x:.*e}", HUMAN_DIGITS - 1);
        let (mantissa, exponent) = s.split_once('e').unwrap_or((&s, "0"));
        let mantissa = mantissa.trim_end_matches('0').trim_end_matches('.');
        return format!("{mantissa}e{exponent}");
    }
    let decimals = (HUMAN_DIGITS as i32 - 1 - magnitude).max(0) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

impl Display for Why {
    /// One plain sentence, e.g. "FDNR: 7 op-amps against 22 for simulated
    /// inductors".
    fn fmt(&self, f: &mut Formatter<'_>) -> fmt::Result {
        let gic = format!("{} for simulated inductors", self.gic_opamps);
        match (self.asked, self.used, self.fdnr_opamps, &self.fdnr_obstacle) {
            (Method::Auto, Method::Fdnr, Some(fdnr), _) => {
                write!(f, "FDNR: {fdnr} op-amps against {gic}")
            }
            (Method::Auto, _, _, Some(obstacle)) => write!(
                f,
                "GIC: {} op-amps; the FDNR method needs a lowpass ladder with grounded capacitors, but {obstacle}",
                self.gic_opamps
            ),
            (Method::Auto, _, Some(fdnr), None) if fdnr == self.gic_opamps => write!(
                f,
                "GIC: {} op-amps, as many as the FDNR image, and it keeps the resistive terminations",
                self.gic_opamps
            ),
            (Method::Auto, _, Some(fdnr), None) => write!(
                f,
                "GIC: {} op-amps against {fdnr} for the FDNR image",
                self.gic_opamps
            ),
            (_, Method::Fdnr, Some(fdnr), _) => write!(f, "FDNR, as asked: {fdnr} op-amps"),
            _ => write!(f, "GIC, as asked: {} op-amps", self.gic_opamps),
        }
    }
}

impl Display for Note {
    fn fmt(&self, f: &mut Formatter<'_>) -> fmt::Result {
        match self {
            Note::SeriesSwap {
                grounded,
                other,
                node,
            } => write!(
                f,
                "{grounded} and {other} in series from node {node} to ground: swapped so that {grounded} ends at ground"
            ),
            Note::Refined {
                balance_hz,
                correction,
                balanced_deviation_db,
                compensated_deviation_db,
                refined_deviation_db,
            } => write!(
                f,
                "compensated and refined: each converter's value made exact with the op-amp model at the balance frequency, then balance at {}, trim correction {}; largest passband deviation {} dB balanced, {} dB compensated, {} dB refined",
                eng(*balance_hz, "Hz"),
                factor(*correction),
                db(*balanced_deviation_db),
                db(*compensated_deviation_db),
                db(*refined_deviation_db)
            ),
            Note::BeyondRipple {
                deviation_db,
                ripple_db,
                gbw_hz,
                required_gbw_hz,
            } => {
                write!(
                    f,
                    "the op-amps' gain-bandwidth, {}, moves the passband by {} dB from the passive ideal, more than the {} dB ripple; ",
                    eng(*gbw_hz, "Hz"),
                    db(*deviation_db),
                    db(*ripple_db)
                )?;
                match required_gbw_hz {
                    Some(required) => write!(
                        f,
                        "op-amps of {} gain-bandwidth would hold it within the ripple (checked by a rebuild)",
                        eng(*required, "Hz")
                    ),
                    None => write!(
                        f,
                        "no gain-bandwidth the search reached held it within the ripple"
                    ),
                }
            }
            Note::RefinedUnstable { root } => write!(
                f,
                "the refined values left a natural frequency at {} with damping ratio {}, so the balanced values are kept",
                eng(root.frequency_hz, "Hz"),
                damping(root.damping_ratio)
            ),
            Note::Damped {
                loop_hz,
                q,
                resistors,
            } => {
                let list = resistor_list(resistors.iter().map(|r| (&r.designator, r.ohm)));
                write!(
                    f,
                    "the ladder has loops of series L-C pairs or cutsets of L-C tanks all resonant at {} (the bandstop image of the prototype's capacitor loops or inductor cutsets): an undamped natural frequency the output never sees and the op-amps can push into growth; damping resistors ({}) give each of those resonators Q = {} and the mode a damping ratio of {} with ideal op-amps",
                    eng(*loop_hz, "Hz"),
                    list.join(", "),
                    q,
                    damping(0.5 / q)
                )
            }
            Note::DcPath {
                dc_gain_db,
                ladder_dc_gain_db,
                resistors,
            } => {
                let list = resistor_list(resistors.iter().map(|r| (&r.designator, r.ohm)));
                write!(
                    f,
                    "DC gain {} dB against the ladder's {} dB: the termination capacitors would leave the FDNR inputs without a DC path, so {} across them hold the ladder's DC gain",
                    db(*dc_gain_db),
                    db(*ladder_dc_gain_db),
                    list.join(" and ")
                )
            }
            Note::DcPathEffect {
                deviation_db,
                from_hz,
                to_hz,
            } => write!(
                f,
                "with ideal op-amps the DC-path resistors move the response by at most {deviation_db:.1e} dB between {} and the balance frequency {}",
                eng(*from_hz, "Hz"),
                eng(*to_hz, "Hz")
            ),
        }
    }
}

/// "C_RS 5.305 nF -> 5.6 nF, ..." for moved capacitors.
fn moved(list: &[Moved]) -> String {
    list.iter()
        .map(|m| {
            let (from, to) = (eng(m.from_f, "F"), eng(m.to_f, "F"));
            let outside = if m.was_outside_range {
                " (was outside the range)"
            } else {
                ""
            };
            if from == to {
                format!("{} {to}", m.designator)
            } else {
                format!("{} {from} -> {to}{outside}", m.designator)
            }
        })
        .collect::<Vec<_>>()
        .join(", ")
}

impl Display for Rescale {
    fn fmt(&self, f: &mut Formatter<'_>) -> fmt::Result {
        match self {
            Rescale::ImageLevel { factor: k, capacitors } => write!(
                f,
                "FDNR image: every impedance x{} (the voltage ratios do not change), so its termination capacitors land on preferred values in range: {}",
                factor(*k),
                moved(capacitors)
            ),
            Rescale::Converter {
                replaces,
                capacitors,
                moves,
            } => {
                write!(
                    f,
                    "converter for {replaces}: {}; impedance level of Z2..Z5 x{}",
                    moved(capacitors),
                    factor(moves.level)
                )?;
                if moves.balance != 1.0 {
                    write!(
                        f,
                        ", Z1 x{} and Z5 /{} (its Z4:Z5 balance frequency x{})",
                        factor(moves.balance),
                        factor(moves.balance),
                        factor(1.0 / moves.balance)
                    )?;
                }
                f.write_str("; the value it realizes is unchanged")
            }
        }
    }
}

/// "1.5 uF to 3.3 uF" for the smallest and largest ladder capacitor.
fn capacitor_span([low, high]: [f64; 2]) -> String {
    format!("{} to {}", eng(low, "F"), eng(high, "F"))
}

impl Display for LadderLevel {
    /// One sentence: the level asked for, and with a free level the
    /// terminations before and after, the factor and the ladder's
    /// capacitors before and after.
    fn fmt(&self, f: &mut Formatter<'_>) -> fmt::Result {
        let terminations = |source: f64, load: f64| {
            format!("source {}, load {}", eng(source, "ohm"), eng(load, "ohm"))
        };
        match self.asked {
            ImpedanceLevel::Fixed => {
                f.write_str("impedance level fixed: the design file's terminations")
            }
            ImpedanceLevel::Free if self.ladder_parts == 0 => f.write_str(
                "impedance level free, but the build keeps no part of the ladder at its level: the design file's terminations",
            ),
            ImpedanceLevel::Free => {
                write!(
                    f,
                    "impedance level free: terminations x{} from {} to {}",
                    factor(self.factor),
                    terminations(self.given_source_ohm, self.given_load_ohm),
                    terminations(self.source_ohm, self.load_ohm)
                )?;
                if let (Some(before), Some(after)) = (self.given_capacitors_f, self.capacitors_f) {
                    write!(
                        f,
                        "; the ladder's capacitors {} become {}",
                        capacitor_span(before),
                        capacitor_span(after)
                    )?;
                }
                Ok(())
            }
        }
    }
}

/// Why some ladder part stays outside its range at every level.
const NO_LEVEL: &str = "no impedance level puts every ladder part in its range (the terminations scale the ladder's capacitors all alike, and themselves the other way)";

/// The warnings of a level: one line per ladder part outside a default
/// range, then what would fit them (empty when every part fits).
pub fn level_warnings(level: &LadderLevel) -> Vec<String> {
    if level.outside_default_range.is_empty() {
        return Vec::new();
    }
    let mut lines: Vec<String> = level
        .outside_default_range
        .iter()
        .map(|p| {
            let range = match p.unit {
                "ohm" => "the resistor range preferred for terminations",
                _ => "the default parts.capacitor_range",
            };
            format!(
                "WARNING: {} = {} lies outside {range}, {} to {}",
                p.designator,
                eng(p.value, p.unit),
                eng(p.low, p.unit),
                eng(p.high, p.unit)
            )
        })
        .collect();
    lines.push(match (level.asked, level.fitting_factor) {
        (ImpedanceLevel::Fixed, Some(k)) => format!(
            "WARNING: terminations of source {}, load {} (x{}) put every ladder part in its range: set [terminations] level = \"free\" to have them chosen, or parts.capacitor_range to buy these parts",
            eng(level.given_source_ohm * k, "ohm"),
            eng(level.given_load_ohm * k, "ohm"),
            factor(k)
        ),
        (ImpedanceLevel::Fixed, None) => format!("WARNING: {NO_LEVEL}: set parts.capacitor_range to buy these parts"),
        (ImpedanceLevel::Free, _) => format!("WARNING: {NO_LEVEL}; the level chosen misses the ranges least"),
    });
    lines
}

impl Display for Margin {
    fn fmt(&self, f: &mut Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Margin::NoStopband => "no stopband edge given",
            Margin::Table => "a table prototype: the mask is not checked",
            Margin::StopbandEdge => {
                "the stopband attenuation is kept; any surplus order moves the stopband edge closer to the passband"
            }
            Margin::Attenuation => {
                "the stopband edge is kept; any surplus order adds attenuation there"
            }
        })
    }
}

impl Display for OrderChoice {
    fn fmt(&self, f: &mut Formatter<'_>) -> fmt::Result {
        match self {
            OrderChoice::Given => f.write_str("given"),
            OrderChoice::Table => f.write_str("from the table"),
            OrderChoice::ForYield { minimum } => {
                write!(
                    f,
                    "chosen by the search over orders from {minimum}, the order of the specification alone"
                )
            }
            OrderChoice::Computed {
                minimum,
                raised_for_form,
                raised_for_delay,
            } => {
                match raised_for_form {
                    false => write!(f, "the minimum for the mask, {minimum}")?,
                    true => write!(
                        f,
                        "raised from the minimum {minimum}: the even-order form the terminations need missed the mask"
                    )?,
                }
                match raised_for_delay {
                    0 => Ok(()),
                    n => write!(f, "; raised by {n} more to keep the group delay spread"),
                }
            }
        }
    }
}

/// Why a Monte Carlo drew fewer boards than [`crate::design::DEFAULT_TRIALS`]
/// when nothing asked for a count: "56 boards, the default for a build of
/// 76 op-amps, ...".
pub fn shortened_default(boards: usize, opamps: usize) -> String {
    format!(
        "{boards} boards, the default for a build of {opamps} op-amps, whose every board's stability is judged: [montecarlo] trials sets more"
    )
}

/// Why a build shows no op-amp levels: the ladder has no inductor, so
/// nothing was replaced by a converter.
pub const NO_OPAMPS: &str =
    "no op-amps (the ladder has no inductor to replace), so no op-amp levels and no levels chart";

/// "passband checked up to 1 MHz (GBW / 10), where it is -0.5 dB from
/// the passive ideal".
pub fn top_of_range(top: &TopOfRange) -> String {
    format!(
        "passband checked up to {} ({} x the op-amps' GBW, or their second pole if lower: the top of the op-amp range), where it is {} dB from the passive ideal",
        eng(top.freq_hz, "Hz"),
        TOP_OF_RANGE,
        db(top.deviation_db)
    )
}

/// "op-amp input bias 100 nA into each input: out at -1.2 mV DC, op-amp
/// outputs within 1.05 V of 0 V (X_RS)", with what to do when an output
/// sits beyond [`BIAS_SHARE`] of `swing_v`; or why the bias has no DC
/// path.
pub fn bias_words(bias_current_a: f64, bias: Option<&BiasOffsets>, swing_v: f64) -> String {
    match bias {
        Some(b) => {
            let advice = if b.largest_v.abs() > swing_v {
                format!(
                    ": beyond the {} swing, so that op-amp saturates and the filter does not work; {PICOAMPERE}",
                    eng(swing_v, "V")
                )
            } else if b.largest_v.abs() > BIAS_SHARE * swing_v {
                format!(
                    ": {} of the {} swing gone at DC; {PICOAMPERE}",
                    super::search::percent(b.largest_v.abs() / swing_v),
                    eng(swing_v, "V")
                )
            } else {
                String::new()
            };
            format!(
                "op-amp input bias {} into each input puts out at {} DC and {} at {} by the linear model{advice}",
                eng(b.bias_current_a, "A"),
                eng(b.out_v, "V"),
                b.largest_designator,
                eng(b.largest_v, "V")
            )
        }
        None => format!(
            "op-amp input bias {}: no DC path takes it (a node only capacitors reach), so it charges that node until an op-amp saturates",
            eng(bias_current_a, "A")
        ),
    }
}

/// What keeps the bias currents' DC small.
const PICOAMPERE: &str =
    "op-amps of picoampere bias (FET inputs) keep it small (set [opamp] bias_current_a to theirs)";

/// "WARNING: active on parts: ..." when the bias currents drive an op-amp
/// of the build on parts beyond the swing at DC; `None` otherwise.
pub fn bias_warning(bias: Option<&BiasOffsets>, swing_v: f64) -> Option<String> {
    let b = bias.filter(|b| b.largest_v.abs() > swing_v)?;
    Some(format!(
        "WARNING: {}: the op-amps' input bias ({} each) drives {} to {} at DC, beyond the {} swing: that op-amp saturates and the board does not work; {PICOAMPERE}",
        crate::design::Build::ActiveOnParts,
        eng(b.bias_current_a, "A"),
        b.largest_designator,
        eng(b.largest_v, "V"),
        eng(swing_v, "V")
    ))
}

/// The share of the swing an op-amp output may sit at DC from the bias
/// currents before the words say what to do: a tenth, past which the
/// signal's headroom visibly shrinks (a choice of the project).
pub const BIAS_SHARE: f64 = 0.1;

/// "R1 = 1 kohm", one per resistor given as (designator, ohm).
fn resistor_list<'a>(resistors: impl Iterator<Item = (&'a String, f64)>) -> Vec<String> {
    resistors
        .map(|(designator, ohm)| format!("{designator} = {}", eng(ohm, "ohm")))
        .collect()
}

/// "1 kHz, damping ratio 5.000e-7": a natural frequency as read.
fn natural(root: &NaturalFrequency) -> String {
    format!(
        "{}, damping ratio {}",
        eng(root.frequency_hz, "Hz"),
        damping(root.damping_ratio)
    )
}

/// The op-amp corner a verdict belongs to: "GBW 7 MHz" (and the output
/// resistance when it has one).
fn corner_words(c: &CornerVerdict) -> String {
    let gbw = c
        .opamp
        .gbw_hz()
        .map_or(String::new(), |g| format!("GBW {}", eng(g, "Hz")));
    match c.opamp.output_ohm() {
        ohm if ohm > 0.0 => format!("{gbw}, output {}", eng(ohm, "ohm")),
        _ => gbw,
    }
}

/// The active exact build's stability in words: the verdict with the
/// nominal op-amps and their least-damped natural frequency, then the
/// corners of the op-amp spread (the unstable ones named).
pub fn stability(act: &ActiveReport) -> String {
    let Some(stable) = act.stable else {
        return "stability not judged with ideal op-amps".to_string();
    };
    let mut s = match stable {
        true => "stable".to_string(),
        false => "UNSTABLE".to_string(),
    };
    if let Some(root) = &act.least_damped_natural_frequency {
        s += &format!(" (least-damped natural frequency {})", natural(root));
    }
    let unstable: Vec<&CornerVerdict> = act
        .stability_corners
        .iter()
        .filter(|c| !c.verdict.stable)
        .collect();
    match (act.stability_corners.len(), unstable.first()) {
        (0, _) => {}
        (2, None) => s += "; stable at both corners of the op-amp spread",
        (n, None) => s += &format!("; stable at all {n} corners of the op-amp spread"),
        (n, Some(_)) => {
            let named: Vec<String> = unstable
                .iter()
                .map(|c| match &c.verdict.least_damped {
                    Some(root) => format!("{}: {}", corner_words(c), natural(root)),
                    None => corner_words(c),
                })
                .collect();
            s += &format!(
                "; UNSTABLE at {} of {n} corners of the op-amp spread ({})",
                unstable.len(),
                named.join("; ")
            );
        }
    }
    s
}

/// The op-amp model in words: "single-pole op-amps, GBW 10 MHz, A0 100
/// dB"; a two-pole model adds its second pole and the phase margin it
/// leaves a follower ([`OpAmpModel::phase_margin_deg`], to a tenth of a
/// degree, the precision a phase margin is quoted to).
pub fn opamp_model(model: &OpAmpModel) -> String {
    let (mut s, dc_gain, output_ohm) = match *model {
        OpAmpModel::Ideal => return "ideal op-amps".to_string(),
        OpAmpModel::SinglePole {
            dc_gain,
            gbw_hz,
            output_ohm,
        } => (
            format!("single-pole op-amps, GBW {}", eng(gbw_hz, "Hz")),
            dc_gain,
            output_ohm,
        ),
        OpAmpModel::TwoPole {
            dc_gain,
            gbw_hz,
            second_pole_hz,
            output_ohm,
        } => {
            let mut s = format!(
                "two-pole op-amps, GBW {}, second pole {}",
                eng(gbw_hz, "Hz"),
                eng(second_pole_hz, "Hz")
            );
            if let Some(margin) = model.phase_margin_deg() {
                s += &format!(" (phase margin {margin:.1} deg at unity gain)");
            }
            (s, dc_gain, output_ohm)
        }
    };
    s += &format!(", A0 {} dB", factor(20.0 * dc_gain.log10()));
    if output_ohm > 0.0 {
        s += &format!(", output {}", eng(output_ohm, "ohm"));
    }
    s
}

/// What the passband level at the edge is called: a ripple where the
/// passband ripples, the loss at the edge where it is monotonic.
pub fn edge_loss_name(family: Option<Family>) -> &'static str {
    match family {
        Some(f) if !f.equiripple_passband() => "loss at the edge",
        _ => "ripple",
    }
}

/// What fixed the passband edge of a Bessel lowpass given by another
/// frequency scale, in words.
pub fn scale_words(scale: FrequencyScale) -> String {
    match scale {
        FrequencyScale::DcDelay { dc_delay_s } => {
            format!("from a group delay of {} at DC", eng(dc_delay_s, "s"))
        }
        FrequencyScale::Asymptote { asymptote_hz } => {
            format!("from an asymptote frequency of {}", eng(asymptote_hz, "Hz"))
        }
    }
}

/// A gain against the bound it is judged by, as the trade says it: a loss
/// below the passband level against what is allowed ("passband loss
/// 3.07 dB, 3.0103 dB allowed") or an attenuation against what is asked
/// ("attenuation 47.5 dB, 50 dB asked").
pub fn bound_words(gain_db: f64, limit_db: f64, lower_bound: bool, level_db: f64) -> String {
    let (what, limit) = if lower_bound {
        ("passband loss", "allowed")
    } else {
        ("attenuation", "asked")
    };
    format!(
        "{what} {} dB, {} dB {limit}",
        db(level_db - gain_db),
        db(level_db - limit_db)
    )
}

/// A build's integrated noise: "68.871 uV rms at the output (137.74 uV
/// referred to the input)".
pub fn noise_words(n: &crate::design::BuildNoise) -> String {
    use super::eng::format_trimmed as eng;
    format!(
        "{} rms at the output ({} referred to the input)",
        eng(n.output_v_rms, "V"),
        eng(n.input_v_rms, "V")
    )
}

/// The largest sources of a build's noise: "X_C3_2 input current noise
/// 25 %, RS thermal noise 20 %".
pub fn sources_words(n: &crate::design::BuildNoise) -> String {
    n.top
        .iter()
        .map(|c| format!("{} {} {:.1} %", c.designator, c.kind, c.share_pct))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The dynamic range in words.
pub fn dynamic_range_words(r: &crate::design::DynamicRange, input_noise_v: f64) -> String {
    use super::eng::format_trimmed as eng;
    format!(
        "dynamic range {} dB: the largest sine at the input is {} peak ({} reaches its {} at {}) over {} rms of input-referred noise",
        db(r.range_db),
        eng(r.max_input_v_peak, "V"),
        r.limited_by,
        r.headroom,
        eng(r.at_hz, "Hz"),
        eng(input_noise_v, "V")
    )
}

/// The converters' levels in words, with what they gain on the build on
/// parts: "converter levels chosen for dynamic range, 6.96 dB wider than
/// on the nearest capacitor values (noise 6.96 dB lower): C_L1A_2 3.9 nF
/// to 39 nF, ...".
pub fn converter_levels_words(n: &crate::design::NoiseFigures) -> String {
    use super::eng::format_trimmed as eng;
    let l = &n.levels;
    if let Some(why) = &l.not_chosen {
        return format!(
            "converter levels on the nearest capacitor values (choosing them failed: {why})"
        );
    }
    if l.converters.is_empty() {
        return "no converter with a free level".to_string();
    }
    let Some(gain) = n.levels_gain.filter(|_| l.used) else {
        return match l.gain_db > 0.0 {
            true => format!(
                "converter levels on the nearest capacitor values (another level would widen the dynamic range by {} dB, less than the {} dB worth a change)",
                db(l.gain_db),
                crate::realize::MIN_GAIN_DB
            ),
            false => "converter levels on the nearest capacitor values (no other level widens the dynamic range)".to_string(),
        };
    };
    let moved: Vec<String> = l
        .converters
        .iter()
        .filter(|c| c.level != 1.0)
        .map(|c| {
            format!(
                "{} {} to {}",
                c.capacitor,
                eng(c.nearest_f, "F"),
                eng(c.chosen_f, "F")
            )
        })
        .collect();
    format!(
        "converter levels chosen for dynamic range, {} dB wider than on the nearest capacitor values (noise {} dB lower): {}",
        db(gain.range_db),
        db(gain.noise_db),
        moved.join(", ")
    )
}

/// A settling band in words: "0.1 %", or, for the band of an
/// `[adc] bits` converter, "half an LSB of 16 bits (...)".
pub fn band_words(fraction: f64, lsb_of_bits: Option<u32>) -> String {
    match lsb_of_bits {
        Some(n) => format!("half an LSB of {n} bits (the reference level as full scale)"),
        None => format!("{} %", 100.0 * fraction),
    }
}

/// A step response's figures in words: "overshoot 19.2 %, rise time
/// 179.5 us, settles to 1 % in 2.27 ms, to 0.1 % in 4.37 ms, ...".
pub fn step_words(f: &crate::analysis::StepFigures, bits: Option<u32>) -> String {
    use super::eng::format_trimmed as eng;
    // A filter that blocks DC returns to 0 V: its bands are fractions of
    // the passband level, which the reader must be told.
    let mut parts = vec![match f.final_v == 0.0 {
        true => format!(
            "returns to 0 V (bands as fractions of the passband level, {})",
            eng(f.reference_v, "V")
        ),
        false => format!("final value {}", eng(f.final_v, "V")),
    }];
    if let Some(o) = f.overshoot_pct {
        parts.push(format!("overshoot {o:.3} %"));
    }
    if let Some(r) = f.rise_time_s {
        parts.push(format!("rise time (10 to 90 %) {}", eng(r, "s")));
    }
    for (k, s) in f.settling.iter().enumerate() {
        let band = band_words(s.fraction, bits.filter(|_| k == f.settling.len() - 1));
        parts.push(match s.time_s {
            Some(t) => format!("settles to {band} in {}", eng(t, "s")),
            None => format!("settling to {band} beyond the accuracy of its modes"),
        });
    }
    parts.join(", ")
}

/// An arm in words: its parts and its ends ("L3, C3 (n2 to out)"), or
/// with `joined` every node of it to be joined ("L1, C1 (n1, n5 and n2
/// together)").
fn arm_words(arm: &Arm, joined: bool) -> String {
    let end = |n: &str| match n {
        "0" => "ground".to_string(),
        other => other.to_string(),
    };
    // Ground last: "n2 to ground".
    let [a, b] = match arm.ends[0].as_str() {
        "0" => [&arm.ends[1], &arm.ends[0]],
        _ => [&arm.ends[0], &arm.ends[1]],
    };
    match arm.inner.as_slice() {
        inner if joined && !inner.is_empty() => format!(
            "{} ({}, {} and {} together)",
            arm.parts.join(", "),
            end(a),
            inner.join(", "),
            end(b)
        ),
        _ => format!("{} ({} to {})", arm.parts.join(", "), end(a), end(b)),
    }
}

/// "a", "a and b", "a, b and c".
pub fn and_list<S: AsRef<str>>(items: &[S]) -> String {
    joined(items, "and")
}

/// "a", "a or b", "a, b or c".
pub fn or_list<S: AsRef<str>>(items: &[S]) -> String {
    joined(items, "or")
}

/// The items, the last joined by `word`.
fn joined<S: AsRef<str>>(items: &[S], word: &str) -> String {
    let items: Vec<&str> = items.iter().map(AsRef::as_ref).collect();
    match items.as_slice() {
        [] => String::new(),
        [one] => (*one).to_string(),
        [rest @ .., last] => format!("{} {word} {last}", rest.join(", ")),
    }
}

/// One step of the tuning procedure in words: the trimmer and its pair,
/// what to short and take out of circuit, the generator, where to
/// measure and what to set.
pub fn tuning_step_words(step: &TuningStep) -> String {
    let mut setup = Vec::new();
    if !step.shorted.is_empty() {
        let arms: Vec<String> = step.shorted.iter().map(|a| arm_words(a, true)).collect();
        let leads: usize = step.shorted.iter().map(|a| 1 + a.inner.len()).sum();
        setup.push(format!(
            "short {} with {}",
            arms.join(" and "),
            match leads {
                1 => "a clip lead",
                _ => "clip leads",
            }
        ));
    }
    if !step.out_of_circuit.is_empty() {
        let arms: Vec<String> = step
            .out_of_circuit
            .iter()
            .map(|a| arm_words(a, false))
            .collect();
        let lift: Vec<&str> = step
            .out_of_circuit
            .iter()
            .flat_map(|a| a.lift.iter().map(String::as_str))
            .collect();
        setup.push(format!(
            "take {} out of circuit (lift {} at one end, and the converters' op-amp inputs there)",
            arms.join(" and "),
            and_list(&lift)
        ));
    }
    let setup = match setup.is_empty() {
        true => "as assembled".to_string(),
        false => setup.join("; "),
    };
    let read = match step.reading {
        Reading::DeepestMinimum => format!("the deepest minimum at {}", step.node),
        Reading::InPhase => format!("zero phase of {} against in", step.node),
    };
    let ideal = match step.found_with_model {
        true => format!("{} with ideal op-amps", eng(step.ideal_frequency_hz, "Hz")),
        false => {
            "with ideal op-amps; the design's op-amps show no such reading near it".to_string()
        }
    };
    format!(
        "{} (converter for {}, with {}): {setup}; generator {} peak at in, {}; set {} for {read} ({ideal})",
        step.trimmer,
        step.converter_for,
        step.partner,
        eng(step.generator_v_peak, "V"),
        eng(step.frequency_hz, "Hz"),
        step.trimmer,
    )
}

/// What a trim is set by, in words: its step, or preset.
pub fn trim_goal_words(goal: &TrimGoal, trimmer: &str, steps: &[TuningStep]) -> String {
    match goal {
        TrimGoal::Resonance { .. } => match steps.iter().position(|s| s.trimmer == trimmer) {
            Some(k) => format!("tuned in step {}", k + 1),
            None => "tuned".to_string(),
        },
        TrimGoal::Preset => "preset".to_string(),
    }
}

/// The heading of the tuning procedure of the active on parts build: how
/// the steps are read and how the trimmers no step sets are set.
pub fn tuning_heading(steps: usize) -> String {
    match steps {
        0 => "no converter has a resonance to read, so every trimmer is preset: set it with an ohmmeter to its setting before fitting it".to_string(),
        n => format!(
            "tuning procedure ({n} step{}, in order, each trimmer settable in steps of {} % of its value; every other trimmer preset with an ohmmeter to its setting before fitting it):",
            if n == 1 { "" } else { "s" },
            100.0 * TRIMMER_RESOLUTION
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// No figure a person reads shows a negative zero.
    #[test]
    fn negative_zeros_are_dropped() {
        assert_eq!(signed(-0.000001), "0");
        assert_eq!(signed(-0.0123), "-0.01230");
        assert_eq!(db(-0.00001), "0");
        assert_eq!(db(-0.5), "-0.5");
        assert_eq!(db(70.0), "70");
        assert_eq!(db(0.01172), "0.0117");
        assert_eq!(percent(-0.0001), "0.000 %");
        assert_eq!(percent(-0.65), "-0.650 %");
        assert_eq!(percent(0.007), "+0.007 %");
        assert_eq!(factor(2947313.760961), "2.9473e6");
        assert_eq!(factor(1.25), "1.25");
        assert_eq!(factor(0.99871234), "0.99871");
        assert_eq!(factor(100.0), "100");
    }

    /// The two-pole model names its second pole and the phase margin it
    /// leaves. By hand (common practice): with GBW 10 MHz, f2 = 20 MHz and
    /// a large A0 the crossover x = fu / GBW solves x^2 (1 + x^2 / 4) = 1,
    /// x^2 = 2 (sqrt 2 - 1), x = 0.9102, so the margin is
    /// 90 - atan(x / 2) = 65.53 deg (the last 1/A0 moves it by 6e-4 deg).
    #[test]
    fn opamp_models_in_words() {
        let two_pole = OpAmpModel::TwoPole {
            dc_gain: 1e5,
            gbw_hz: 10e6,
            second_pole_hz: 20e6,
            output_ohm: 50.0,
        };
        assert_eq!(
            opamp_model(&two_pole),
            "two-pole op-amps, GBW 10 MHz, second pole 20 MHz (phase margin 65.5 deg at unity gain), A0 100 dB, output 50 ohm"
        );
        let single_pole = OpAmpModel::SinglePole {
            dc_gain: 1e5,
            gbw_hz: 10e6,
            output_ohm: 0.0,
        };
        assert_eq!(
            opamp_model(&single_pole),
            "single-pole op-amps, GBW 10 MHz, A0 100 dB"
        );
        assert_eq!(opamp_model(&OpAmpModel::Ideal), "ideal op-amps");
    }
}

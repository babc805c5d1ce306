//! SPICE decks that `ngspice -b` runs unmodified: a title line, the
//! elements with their standard prefixes, op-amps as `X` instances of
//! subcircuits defined in the deck from plain R, C and E (VCVS) elements,
//! one analysis line (`.ac`, or `.tran` for a step response) and `.end`. Nothing beyond classic SPICE syntax: no
//! `.control` block, no parameters or expressions.
//!
//! Invariants: the deck is written only from a netlist that passed
//! [`Netlist::validate`], so every name is a plain SPICE token, unique
//! ignoring case; node `0` is ground; values carry at least 9
//! significant digits ([`SPICE_DIGITS`]).

use crate::circuit::{CircuitError, Element, Netlist, OpAmpModel};
use crate::export::eng;

/// Significant digits of values in a deck: at least 9, this project's
/// floor, so that rounding never shows in a comparison with ngspice;
/// 10 keeps the rounding (at most 5e-10 relative, for a mantissa just
/// above 1) far below ngspice's own numerical noise (about 1e-6) and the
/// 0.001 dB (1.2e-4) comparisons, while the values stay readable.
pub const SPICE_DIGITS: usize = 10;

/// SPICE scale suffixes from 1e-15 to 1e12. `meg`, not `m`: SPICE reads
/// `m` (either case) as milli.
const SPICE_SUFFIXES: [&str; 10] = ["f", "p", "n", "u", "m", "", "k", "meg", "g", "t"];

/// Gain of the VCVS that stands for an ideal op-amp. A loop with noise
/// gain N errs by about N / A: at 1e9 that is 1e-7 for N up to 100 (below
/// 1e-6 dB), while the VCVS row (entries 1 and 1e9 against conductances
/// of 1e-6..1e-2 S) still leaves ngspice's pivoted LU about 8 good digits.
pub const IDEAL_VCVS_GAIN: f64 = 1e9;

/// The `.ac dec` sweep of a deck.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AcSweep {
    /// Points per decade, at least 1.
    pub points_per_decade: usize,
    /// First frequency, Hz, > 0.
    pub start_hz: f64,
    /// Last frequency, Hz, > start.
    pub stop_hz: f64,
}

/// A transient step response: every voltage source steps from 0 to its
/// AC magnitude at t = 0, rising over one time step (SPICE's own default
/// rise time for a pulse).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StepResponse {
    /// Time step, which is also the largest step ngspice may take, s, > 0.
    pub step_s: f64,
    /// End time, s, > step.
    pub stop_s: f64,
}

/// Which analysis a deck runs.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Analysis<'a> {
    Ac(&'a AcSweep),
    Step(&'a StepResponse),
}

/// Why no deck was written.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SpiceError {
    /// The netlist is invalid.
    #[error("netlist: {0}")]
    Netlist(#[from] CircuitError),
    /// The sweep is empty or out of range.
    #[error("AC sweep {points_per_decade} points per decade from {start_hz} Hz to {stop_hz} Hz: need at least 1 point per decade and 0 < start < stop, both finite")]
    Sweep {
        /// Points per decade given.
        points_per_decade: usize,
        /// Start given.
        start_hz: f64,
        /// Stop given.
        stop_hz: f64,
    },
    /// The step response times are out of range.
    #[error(
        "step response with time step {step_s} s to {stop_s} s: need 0 < step < stop, both finite"
    )]
    Step {
        /// Step given.
        step_s: f64,
        /// Stop given.
        stop_s: f64,
    },
}

/// A value for a deck: [`SPICE_DIGITS`] significant digits, trailing
/// zeros dropped, with a SPICE suffix ("1.5963m", "47n", "10k",
/// "2.2meg"); outside 1e-15..1e15 in exponent form ("1.5e-18"). Zero is
/// "0". Non-finite values have no SPICE spelling (a validated netlist has
/// none); they come out as Rust prints them.
pub fn value(v: f64) -> String {
    let Some((mantissa, exp3)) = eng::split(v, SPICE_DIGITS) else {
        return if v == 0.0 { "0".into() } else { v.to_string() };
    };
    let mantissa = match mantissa.contains('.') {
        true => mantissa.trim_end_matches('0').trim_end_matches('.'),
        false => &mantissa,
    };
    match eng::prefix(&SPICE_SUFFIXES, exp3) {
        Some(suffix) => format!("{mantissa}{suffix}"),
        None => format!("{mantissa}e{exp3}"),
    }
}

/// The distinct op-amp models of a netlist, in order of first use, each
/// with the subcircuit name its instances refer to.
fn opamp_models(netlist: &Netlist) -> Vec<(OpAmpModel, String)> {
    let mut models: Vec<(OpAmpModel, String)> = Vec::new();
    for element in &netlist.elements {
        if let Element::OpAmp { model, .. } = element {
            if !models.iter().any(|(m, _)| m == model) {
                let name = match model {
                    OpAmpModel::Ideal => "opamp_ideal".to_string(),
                    OpAmpModel::SinglePole { .. } => format!("opamp_pole{}", models.len() + 1),
                    OpAmpModel::TwoPole { .. } => format!("opamp_two_pole{}", models.len() + 1),
                };
                models.push((*model, name));
            }
        }
    }
    models
}

/// One element line.
fn element_line(
    netlist: &Netlist,
    element: &Element,
    models: &[(OpAmpModel, String)],
    analysis: Analysis,
) -> String {
    let node = |i: usize| netlist.nodes[i].as_str();
    match element {
        Element::Resistor { name, a, b, ohm: v }
        | Element::Capacitor {
            name,
            a,
            b,
            farad: v,
        }
        | Element::Inductor {
            name,
            a,
            b,
            henry: v,
        } => {
            format!("{name} {} {} {}", node(*a), node(*b), value(*v))
        }
        Element::VoltageSource {
            name,
            pos,
            neg,
            ac_volt,
        } => format!(
            "{name} {} {} DC 0 AC {}{}",
            node(*pos),
            node(*neg),
            value(*ac_volt),
            source_waveform(*ac_volt, analysis)
        ),
        Element::OpAmp {
            name,
            plus,
            minus,
            out,
            model,
        } => {
            let subckt = models
                .iter()
                .find(|(m, _)| m == model)
                .map_or("", |(_, s)| s);
            format!(
                "{name} {} {} {} {subckt}",
                node(*plus),
                node(*minus),
                node(*out)
            )
        }
    }
}

/// The subcircuit of one op-amp model, ports (plus, minus, out).
fn subcircuit(model: &OpAmpModel, name: &str) -> String {
    match *model {
        OpAmpModel::Ideal => format!(
            "* ideal op-amp: a VCVS of gain {}\n.subckt {name} p m o\nE1 o 0 p m {}\n.ends {name}\n",
            value(IDEAL_VCVS_GAIN),
            value(IDEAL_VCVS_GAIN)
        ),
        OpAmpModel::SinglePole {
            dc_gain,
            gbw_hz,
            output_ohm,
        } => {
            let header = format!(
                "* single-pole op-amp: A0 = {}, GBW = {} Hz, output {} ohm",
                value(dc_gain),
                value(gbw_hz),
                value(output_ohm)
            );
            pole_chain(&header, name, dc_gain, &[gbw_hz / dc_gain], output_ohm)
        }
        OpAmpModel::TwoPole {
            dc_gain,
            gbw_hz,
            second_pole_hz,
            output_ohm,
        } => {
            let header = format!(
                "* two-pole op-amp: A0 = {}, GBW = {} Hz, second pole = {} Hz, output {} ohm",
                value(dc_gain),
                value(gbw_hz),
                value(second_pole_hz),
                value(output_ohm)
            );
            pole_chain(
                &header,
                name,
                dc_gain,
                &[gbw_hz / dc_gain, second_pole_hz],
                output_ohm,
            )
        }
    }
}

/// The capacitor of an op-amp subcircuit's first pole, farad. With the
/// integrator below, node voltages stay at signal level; the earlier form
/// (a VCVS of gain A0 into 1 ohm and 1/w1) put A0 times the input
/// difference on a node, and ngspice's transient stopped on it ("timestep
/// too small") with near-ideal op-amps (GBW 10 THz, A0 200 dB) on a
/// 3rd-order elliptic bandstop, while this form ran to the end (measured).
const FIRST_POLE_F: f64 = 1e-9;

/// An op-amp subcircuit of lags in cascade: G1, a transconductance
/// gm = 2 pi GBW C into C1 = [`FIRST_POLE_F`] with R1 = A0 / gm across
/// it, the first pole A0 / (1 + s/w1); each further pole buffered by a
/// unit VCVS into its own 1 ohm and 1/w; a last unit VCVS drives the
/// output, through RO where there is an output resistance. Nodes are
/// lettered in order (b for the first pole, c, d for the second, ...),
/// so ngspice sees A(s) = A0 / prod(1 + s/w_k).
fn pole_chain(header: &str, name: &str, dc_gain: f64, poles_hz: &[f64], output_ohm: f64) -> String {
    let letter = |i: usize| char::from(b'a' + i as u8);
    let mut body = String::new();
    for (k, &pole_hz) in poles_hz.iter().enumerate() {
        let (from, to) = (letter(2 * k), letter(2 * k + 1));
        if k == 0 {
            let gm = std::f64::consts::TAU * pole_hz * dc_gain * FIRST_POLE_F;
            body += &format!(
                "G1 0 {to} p m {}\nR1 {to} 0 {}\nC1 {to} 0 {}\n",
                value(gm),
                value(dc_gain / gm),
                value(FIRST_POLE_F)
            );
            continue;
        }
        body += &format!("E{} {from} 0 {} 0 1\n", k + 1, letter(2 * k - 1));
        body += &format!(
            "R{n} {from} {to} 1\nC{n} {to} 0 {}\n",
            value(1.0 / (std::f64::consts::TAU * pole_hz)),
            n = k + 1
        );
    }
    let last = letter(2 * poles_hz.len() - 1);
    let buffer = letter(2 * poles_hz.len());
    let driven = if output_ohm > 0.0 {
        buffer.to_string()
    } else {
        "o".to_string()
    };
    body += &format!("E{} {driven} 0 {last} 0 1\n", poles_hz.len() + 1);
    if output_ohm > 0.0 {
        body += &format!("RO {buffer} o {}\n", value(output_ohm));
    }
    format!("{header}\n.subckt {name} p m o\n{body}.ends {name}\n")
}

/// The transient waveform of a source: none for AC, else a pulse from 0
/// to the AC magnitude at t = 0 that lasts past the end of the run.
fn source_waveform(ac_volt: f64, analysis: Analysis) -> String {
    match analysis {
        Analysis::Ac(_) => String::new(),
        Analysis::Step(t) => format!(
            " PULSE(0 {} 0 {} {} {} {})",
            value(ac_volt),
            value(t.step_s),
            value(t.step_s),
            value(2.0 * t.stop_s),
            value(4.0 * t.stop_s)
        ),
    }
}

/// Checks the analysis and writes its control line.
fn analysis_line(analysis: Analysis) -> Result<String, SpiceError> {
    match analysis {
        Analysis::Ac(&AcSweep {
            points_per_decade,
            start_hz,
            stop_hz,
        }) => {
            let finite = start_hz.is_finite() && stop_hz.is_finite();
            if finite && points_per_decade >= 1 && start_hz > 0.0 && stop_hz > start_hz {
                // The `.print` line makes `ngspice -b deck.cir` run and
                // tabulate the sweep as it is (without one it runs
                // nothing); classic SPICE 2 output syntax.
                Ok(format!(
                    ".ac dec {points_per_decade} {} {}\n.print ac vdb(out) vp(out)",
                    value(start_hz),
                    value(stop_hz)
                ))
            } else {
                Err(SpiceError::Sweep {
                    points_per_decade,
                    start_hz,
                    stop_hz,
                })
            }
        }
        Analysis::Step(&StepResponse { step_s, stop_s }) => {
            if step_s.is_finite() && stop_s.is_finite() && step_s > 0.0 && stop_s > step_s {
                // TSTART 0, TMAX = the step, so ngspice resolves it.
                Ok(format!(
                    ".tran {} {} 0 {}",
                    value(step_s),
                    value(stop_s),
                    value(step_s)
                ))
            } else {
                Err(SpiceError::Step { step_s, stop_s })
            }
        }
    }
}

/// The title line: SPICE takes the whole first line as the title, so line
/// breaks and control characters become spaces; an empty title would
/// leave the line blank, so it gets a placeholder.
fn title_line(title: &str) -> String {
    let line: String = title
        .chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect();
    match line.trim() {
        "" => "untitled circuit".to_string(),
        t => t.to_string(),
    }
}

/// A self-contained deck for an `.ac dec` sweep of the netlist.
pub fn deck(netlist: &Netlist, sweep: &AcSweep) -> Result<String, SpiceError> {
    write(netlist, Analysis::Ac(sweep))
}

/// A self-contained deck for the step response of the netlist (`.tran`),
/// for stability checks: a stable circuit settles, an unstable one grows.
pub fn step_deck(netlist: &Netlist, tran: &StepResponse) -> Result<String, SpiceError> {
    write(netlist, Analysis::Step(tran))
}

fn write(netlist: &Netlist, analysis: Analysis) -> Result<String, SpiceError> {
    netlist.validate()?;
    let control = analysis_line(analysis)?;
    let models = opamp_models(netlist);
    let mut out = title_line(&netlist.title);
    out.push('\n');
    for element in &netlist.elements {
        out.push_str(&element_line(netlist, element, &models, analysis));
        out.push('\n');
    }
    for (model, name) in &models {
        out.push_str(&subcircuit(model, name));
    }
    out.push_str(&control);
    out.push_str("\n.end\n");
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_use_spice_suffixes_with_ten_digits() {
        assert_eq!(value(1.5963e-3), "1.5963m");
        assert_eq!(value(47e-9), "47n");
        assert_eq!(value(2.2e6), "2.2meg");
        assert_eq!(value(1.0), "1");
        assert_eq!(value(1e9), "1g");
        assert_eq!(value(123456.789012), "123.456789k");
        assert_eq!(value(1.0 / 3.0), "333.3333333m");
        assert_eq!(value(2.5e-18), "2.5e-18");
        assert_eq!(value(0.0), "0");
        assert_eq!(value(-4.7e3), "-4.7k");
    }
}

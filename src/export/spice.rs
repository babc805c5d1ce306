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

use crate::circuit::{CircuitError, Element, Netlist, OpAmpModel, OpAmpNoise, BOLTZMANN_J_PER_K};
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

/// The noise a deck's elements carry: the op-amps' input noise (as
/// ordinary elements inside each op-amp subcircuit) and the temperature
/// of the resistors' thermal noise.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DeckNoise {
    /// Every op-amp's input noise.
    pub opamp: OpAmpNoise,
    /// The circuit's temperature, kelvin.
    pub temperature_k: f64,
}

/// The resistance of every noise generator in an op-amp subcircuit, ohm:
/// its noise voltage, sqrt(4 k T R) (times sqrt(1 + f_c/f) with a 1/f
/// corner), is copied onto the input by a controlled source whose gain
/// sets the density, so the resistance itself is free; 1 kohm keeps the
/// generator's DC bias at 1 V.
const GENERATOR_OHM: f64 = 1e3;

/// The DC bias current through a generator with a 1/f corner, A: SPICE
/// gives a resistor flicker noise of current density KF I^AF / f (AF = 2,
/// EF = 1 here), so KF = 4 k T f_c / (R I^2) puts the corner at f_c. A
/// second source of the same current through a noiseless twin cancels
/// the bias at the copy.
const GENERATOR_BIAS_A: f64 = 1e-3;

/// Which analysis a deck runs.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Analysis<'a> {
    Ac(&'a AcSweep),
    Step(&'a StepResponse),
    /// The AC sweep's grid, for ngspice's `.noise` at V(out) with the
    /// named source as input.
    Noise(&'a AcSweep, &'a str),
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
    /// A noise analysis needs a source at the input and the netlist has
    /// none.
    #[error("a noise analysis needs the voltage source at the input, and the netlist has no voltage source")]
    NoSource,
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

/// The op-amp input noise of a subcircuit as SPICE elements: the input
/// voltage noise a VCVS in series with the non-inverting input (node
/// `pn` feeds the amplifier instead of `p`), the input current noise a
/// VCCS into each input, each copying the noise voltage of its own
/// generator resistor ([`GENERATOR_OHM`], with the flicker bias of
/// [`GENERATOR_BIAS_A`] where there is a 1/f corner). Empty without
/// noise (the amplifier then reads `p` itself).
fn input_noise(noise: Option<&DeckNoise>) -> String {
    let Some(noise) = noise else {
        return String::new();
    };
    let four_kt = 4.0 * BOLTZMANN_J_PER_K * noise.temperature_k;
    let generator_rthz = (four_kt * GENERATOR_OHM).sqrt();
    let n = &noise.opamp;
    let mut out = format!(
        "* input noise: {} V/rtHz (1/f corner {} Hz) in series with p, {} A/rtHz (corner {} Hz) into p and into m\n",
        value(n.en_v_per_rthz),
        value(n.en_corner_hz),
        value(n.in_a_per_rthz),
        value(n.in_corner_hz)
    );
    let mut generator = |tag: &str, corner_hz: f64| -> String {
        if corner_hz > 0.0 {
            let kf = four_kt * corner_hz / (GENERATOR_OHM * GENERATOR_BIAS_A.powi(2));
            out += &format!(
                ".model fl_{tag} R (kf={} af=2 ef=1)\nI_{tag} 0 g_{tag} DC {}\nR_{tag} g_{tag} 0 {} fl_{tag}\nI_{tag}_twin 0 t_{tag} DC {}\nG_{tag}_twin t_{tag} 0 t_{tag} 0 {}\n",
                value(kf),
                value(GENERATOR_BIAS_A),
                value(GENERATOR_OHM),
                value(GENERATOR_BIAS_A),
                value(1.0 / GENERATOR_OHM)
            );
            format!("g_{tag} t_{tag}")
        } else {
            out += &format!("R_{tag} g_{tag} 0 {}\n", value(GENERATOR_OHM));
            format!("g_{tag} 0")
        }
    };
    let en = generator("en", n.en_corner_hz);
    let ip = generator("ip", n.in_corner_hz);
    let im = generator("im", n.in_corner_hz);
    out += &format!(
        "E_en pn p {en} {}\nG_ip p 0 {ip} {}\nG_im m 0 {im} {}\n",
        value(n.en_v_per_rthz / generator_rthz),
        value(n.in_a_per_rthz / generator_rthz),
        value(n.in_a_per_rthz / generator_rthz)
    );
    out
}

/// The subcircuit of one op-amp model, ports (plus, minus, out), with the
/// input noise of `noise` if any. The model's own conductances are
/// voltage-controlled current sources across their nodes, which SPICE
/// counts as noiseless: an op-amp's noise is what its data sheet gives.
/// (A resistor marked `noisy=0` would do in ngspice, but its zero density
/// makes ngspice's integrated noise NaN: it integrates the logarithms.)
fn subcircuit(model: &OpAmpModel, name: &str, noise: Option<&DeckNoise>) -> String {
    let noise_lines = input_noise(noise);
    let input = if noise.is_some() { "pn" } else { "p" };
    let (header, body) = match *model {
        OpAmpModel::Ideal => (
            format!("* ideal op-amp: a VCVS of gain {}", value(IDEAL_VCVS_GAIN)),
            format!("E1 o 0 {input} m {}\n", value(IDEAL_VCVS_GAIN)),
        ),
        OpAmpModel::SinglePole {
            dc_gain,
            gbw_hz,
            output_ohm,
        } => (
            format!(
                "* single-pole op-amp: A0 = {}, GBW = {} Hz, output {} ohm",
                value(dc_gain),
                value(gbw_hz),
                value(output_ohm)
            ),
            pole_chain(input, dc_gain, &[gbw_hz / dc_gain], output_ohm),
        ),
        OpAmpModel::TwoPole {
            dc_gain,
            gbw_hz,
            second_pole_hz,
            output_ohm,
        } => (
            format!(
                "* two-pole op-amp: A0 = {}, GBW = {} Hz, second pole = {} Hz, output {} ohm",
                value(dc_gain),
                value(gbw_hz),
                value(second_pole_hz),
                value(output_ohm)
            ),
            pole_chain(
                input,
                dc_gain,
                &[gbw_hz / dc_gain, second_pole_hz],
                output_ohm,
            ),
        ),
    };
    format!("{header}\n.subckt {name} p m o\n{noise_lines}{body}.ends {name}\n")
}

/// The capacitor of an op-amp subcircuit's first pole, farad. With the
/// integrator below, node voltages stay at signal level; the earlier form
/// (a VCVS of gain A0 into 1 ohm and 1/w1) put A0 times the input
/// difference on a node, and ngspice's transient stopped on it ("timestep
/// too small") with near-ideal op-amps (GBW 10 THz, A0 200 dB) on a
/// 3rd-order elliptic bandstop, while this form ran to the end (measured).
const FIRST_POLE_F: f64 = 1e-9;

/// The body of an op-amp subcircuit of lags in cascade, its amplifier
/// reading node `input` against `m`: G1, a transconductance
/// gm = 2 pi GBW C into C1 = [`FIRST_POLE_F`] with R1 = A0 / gm across
/// it, the first pole A0 / (1 + s/w1); each further pole buffered by a
/// unit VCVS into its own 1 ohm and 1/w; a last unit VCVS drives the
/// output, through RO where there is an output resistance. The
/// resistances are conductances GR1, GR2, ... and GRO (see
/// [`subcircuit`]). Nodes are
/// lettered in order (b for the first pole, c, d for the second, ...),
/// so ngspice sees A(s) = A0 / prod(1 + s/w_k).
fn pole_chain(input: &str, dc_gain: f64, poles_hz: &[f64], output_ohm: f64) -> String {
    let letter = |i: usize| char::from(b'a' + i as u8);
    let mut body = String::new();
    for (k, &pole_hz) in poles_hz.iter().enumerate() {
        let (from, to) = (letter(2 * k), letter(2 * k + 1));
        if k == 0 {
            let gm = std::f64::consts::TAU * pole_hz * dc_gain * FIRST_POLE_F;
            body += &format!(
                "G1 0 {to} {input} m {}\nGR1 {to} 0 {to} 0 {}\nC1 {to} 0 {}\n",
                value(gm),
                value(gm / dc_gain),
                value(FIRST_POLE_F)
            );
            continue;
        }
        body += &format!("E{} {from} 0 {} 0 1\n", k + 1, letter(2 * k - 1));
        body += &format!(
            "GR{n} {from} {to} {from} {to} 1\nC{n} {to} 0 {}\n",
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
        body += &format!("GRO {buffer} o {buffer} o {}\n", value(1.0 / output_ohm));
    }
    body
}

/// The transient waveform of a source: none for AC, else a pulse from 0
/// to the AC magnitude at t = 0 that lasts past the end of the run.
fn source_waveform(ac_volt: f64, analysis: Analysis) -> String {
    match analysis {
        Analysis::Ac(_) | Analysis::Noise(..) => String::new(),
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

/// The `dec` grid of an AC or noise analysis, checked.
fn dec_grid(sweep: &AcSweep) -> Result<String, SpiceError> {
    let &AcSweep {
        points_per_decade,
        start_hz,
        stop_hz,
    } = sweep;
    let finite = start_hz.is_finite() && stop_hz.is_finite();
    if finite && points_per_decade >= 1 && start_hz > 0.0 && stop_hz > start_hz {
        Ok(format!(
            "dec {points_per_decade} {} {}",
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

/// Checks the analysis and writes its control line.
fn analysis_line(analysis: Analysis) -> Result<String, SpiceError> {
    match analysis {
        // The `.print` line makes `ngspice -b deck.cir` run and tabulate
        // the sweep as it is (without one it runs nothing); classic SPICE
        // 2 output syntax.
        Analysis::Ac(sweep) => Ok(format!(
            ".ac {}\n.print ac vdb(out) vp(out)",
            dec_grid(sweep)?
        )),
        // ngspice's noise analysis: the output noise density at V(out)
        // and the input-referred one, per point, then their integrals
        // (`all`: naming the vectors makes ngspice 39 warn that it cannot
        // parse them, though it prints them). The comment keeps the word
        // NaN out of the deck, which a reader could take for a value.
        Analysis::Noise(sweep, source) => Ok(format!(
            "* ngspice integrates each source's density as a power law between\n\
             * points: where one changes by orders of magnitude between two (a\n\
             * transmission zero), its totals can come out not a number; the\n\
             * spectra hold\n\
             .noise v(out) {source} {}\n.print noise all",
            dec_grid(sweep)?
        )),
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

/// A self-contained deck for an `.ac dec` sweep of the netlist, its
/// op-amps noiseless.
pub fn deck(netlist: &Netlist, sweep: &AcSweep) -> Result<String, SpiceError> {
    write(netlist, &[Analysis::Ac(sweep)], None)
}

/// A self-contained deck for the step response of the netlist (`.tran`),
/// for stability checks: a stable circuit settles, an unstable one grows.
pub fn step_deck(netlist: &Netlist, tran: &StepResponse) -> Result<String, SpiceError> {
    write(netlist, &[Analysis::Step(tran)], None)
}

/// A self-contained deck for ngspice's `.noise` analysis of V(out) over
/// the sweep's grid, the op-amps carrying `noise` and the circuit at its
/// temperature.
pub fn noise_deck(
    netlist: &Netlist,
    sweep: &AcSweep,
    noise: &DeckNoise,
) -> Result<String, SpiceError> {
    let source = input_source(netlist)?;
    write(netlist, &[Analysis::Noise(sweep, source)], Some(noise))
}

/// The deck a design exports: the `.ac` sweep and the `.noise` analysis
/// over the same grid, the op-amps carrying `noise`, so that
/// `ngspice -b` on it tabulates the response and the output noise.
pub fn exported_deck(
    netlist: &Netlist,
    sweep: &AcSweep,
    noise: &DeckNoise,
) -> Result<String, SpiceError> {
    let source = input_source(netlist)?;
    write(
        netlist,
        &[Analysis::Ac(sweep), Analysis::Noise(sweep, source)],
        Some(noise),
    )
}

/// The name of the source that drives the input (the first voltage
/// source, by the netlist contract the one at node `in`).
fn input_source(netlist: &Netlist) -> Result<&str, SpiceError> {
    netlist
        .elements
        .iter()
        .find_map(|e| match e {
            Element::VoltageSource { name, .. } => Some(name.as_str()),
            _ => None,
        })
        .ok_or(SpiceError::NoSource)
}

fn write(
    netlist: &Netlist,
    analyses: &[Analysis],
    noise: Option<&DeckNoise>,
) -> Result<String, SpiceError> {
    netlist.validate()?;
    let control = analyses
        .iter()
        .map(|&a| analysis_line(a))
        .collect::<Result<Vec<_>, _>>()?;
    let models = opamp_models(netlist);
    let mut out = title_line(&netlist.title);
    out.push('\n');
    for element in &netlist.elements {
        out.push_str(&element_line(netlist, element, &models, analyses[0]));
        out.push('\n');
    }
    for (model, name) in &models {
        out.push_str(&subcircuit(model, name, noise));
    }
    if let Some(noise) = noise {
        // SPICE takes temperatures in degrees Celsius; both the circuit's
        // and the nominal one, so no value moves with it.
        let celsius = value(noise.temperature_k - 273.15);
        out.push_str(&format!(".options temp={celsius} tnom={celsius}\n"));
    }
    for line in control {
        out.push_str(&line);
        out.push('\n');
    }
    out.push_str(".end\n");
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

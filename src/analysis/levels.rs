//! Signal levels inside an active filter: the peak gain from the input to
//! every op-amp output over frequency, and the largest input the filter
//! takes before the first op-amp clips.
//!
//! Op-amp outputs inside a GIC swing above the input near the band edges
//! (the GIC's node gains, e.g. 1 + R4/R5 at the Z3/Z4 junction, checked
//! against their closed forms in tests/analysis.rs,
//! opamp_levels_follow_the_closed_form_gic_node_gains), so the stage with
//! the highest peak gain sets the filter's maximum input: swing / peak
//! gain. The output voltage read is the op-amp's `out` node (after any
//! output resistance, which drops little at the loads a filter presents).

use num_complex::Complex64;

use super::AnalysisError;
use crate::circuit::{AcSystem, CircuitError, Element, SparseAc};

/// Points of the grid on which op-amp output levels are searched, over
/// the view of a design (two decades or more around its edges): 400
/// log-spaced points lie about 1.2 % apart across two decades, closer
/// than the width of the GIC node peaks near a band edge.
pub const LEVEL_POINTS: usize = 400;

/// The level at one op-amp's output.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct OpAmpLevel {
    /// Element index in the netlist.
    pub element: usize,
    /// Element name.
    #[serde(rename = "designator")]
    pub name: String,
    /// Its output node.
    pub out_node: usize,
    /// Peak of 20 log10 |V(out_node) / V(inp)| over the frequencies, dB.
    pub peak_gain_db: f64,
    /// The frequency of the peak, Hz (the first one on a tie).
    pub peak_freq_hz: f64,
    /// The input amplitude (V peak) at which this output reaches the
    /// stated swing: swing / peak gain.
    #[serde(rename = "max_input_v_peak")]
    pub max_input_v: f64,
    /// Whether this op-amp has the highest peak gain of all, so it clips
    /// first (every op-amp tied at the highest is flagged).
    pub clips_first: bool,
}

/// Peak gains from node `inp` to every op-amp output over `freqs_hz`,
/// and the input level (V peak) at which each output reaches `swing_v`
/// (V peak). Op-amps in netlist order; empty for a circuit without any.
pub fn opamp_levels(
    system: &mut AcSystem,
    inp: usize,
    freqs_hz: &[f64],
    swing_v: f64,
) -> Result<Vec<OpAmpLevel>, AnalysisError> {
    if !(swing_v.is_finite() && swing_v > 0.0) {
        return Err(AnalysisError::BadSwing { swing_v });
    }
    if freqs_hz.is_empty() {
        return Err(AnalysisError::EmptyGrid {
            what: "signal-level frequency",
        });
    }
    let node_count = system.netlist().nodes.len();
    if inp >= node_count {
        return Err(CircuitError::NodeOutOfRange {
            context: "input".to_string(),
            node: inp,
            node_count,
        }
        .into());
    }
    let outputs: Vec<(usize, String, usize)> = system
        .netlist()
        .elements
        .iter()
        .enumerate()
        .filter_map(|(i, e)| match e {
            Element::OpAmp { name, out, .. } => Some((i, name.clone(), *out)),
            _ => None,
        })
        .collect();
    let outs: Vec<usize> = outputs.iter().map(|o| o.2).collect();
    let gains = output_gains(system, inp, freqs_hz, &outs)?;
    // (peak |gain|, its frequency) per op-amp; the first on a tie.
    let peaks: Vec<(f64, f64)> = gains
        .iter()
        .map(|g| {
            g.iter()
                .zip(freqs_hz)
                .fold((f64::NEG_INFINITY, f64::NAN), |best, (&gain, &f)| {
                    if gain > best.0 {
                        (gain, f)
                    } else {
                        best
                    }
                })
        })
        .collect();
    let highest = peaks.iter().map(|p| p.0).fold(f64::NEG_INFINITY, f64::max);
    Ok(outputs
        .into_iter()
        .zip(peaks)
        .map(|((element, name, out_node), (gain, freq))| OpAmpLevel {
            element,
            name,
            out_node,
            peak_gain_db: 20.0 * gain.log10(),
            peak_freq_hz: freq,
            max_input_v: swing_v / gain,
            clips_first: gain == highest,
        })
        .collect())
}

/// The gain from node `inp` to the output of each op-amp of `levels`, dB,
/// at each of `freqs_hz` (for a chart of the levels across frequency).
pub fn level_traces(
    system: &mut AcSystem,
    inp: usize,
    freqs_hz: &[f64],
    levels: &[OpAmpLevel],
) -> Result<Vec<Vec<f64>>, AnalysisError> {
    let outs: Vec<usize> = levels.iter().map(|l| l.out_node).collect();
    Ok(output_gains(system, inp, freqs_hz, &outs)?
        .into_iter()
        .map(|g| g.into_iter().map(|x| 20.0 * x.log10()).collect())
        .collect())
}

/// The largest input sine (V peak) that keeps an output of gain `gain`
/// (V/V) at `freq_hz` within `swing_v` and its peak slope 2 pi f V within
/// `slew_v_per_s` (common practice): [swing limit, slew limit].
pub fn input_limits_v(gain: f64, freq_hz: f64, swing_v: f64, slew_v_per_s: f64) -> [f64; 2] {
    [
        swing_v / gain,
        slew_v_per_s / (std::f64::consts::TAU * freq_hz * gain),
    ]
}

/// The current each op-amp of `levels` delivers from its output into the
/// network, per volt at node `inp` (A/V, complex), at each of `freqs_hz`:
/// the sum over the resistors, capacitors and inductors on its output
/// node of (V(out) - V(other end)) Y(f) (op-amp inputs draw none).
pub fn output_currents(
    system: &mut AcSystem,
    inp: usize,
    freqs_hz: &[f64],
    levels: &[OpAmpLevel],
) -> Result<Vec<Vec<Complex64>>, AnalysisError> {
    // Per op-amp, each branch on its output: (other end, G, C, 1/L), so
    // that Y(s) = G + s C + (1/L)/s.
    let mut nodes: Vec<usize> = Vec::new();
    let mut branches: Vec<Vec<(usize, f64, f64, f64)>> = Vec::new();
    for level in levels {
        let out = level.out_node;
        let mut attached = Vec::new();
        for e in &system.netlist().elements {
            let (a, b, y) = match *e {
                Element::Resistor { a, b, ohm, .. } => (a, b, (1.0 / ohm, 0.0, 0.0)),
                Element::Capacitor { a, b, farad, .. } => (a, b, (0.0, farad, 0.0)),
                Element::Inductor { a, b, henry, .. } => (a, b, (0.0, 0.0, 1.0 / henry)),
                _ => continue,
            };
            let other = match (a == out, b == out) {
                (true, false) => b,
                (false, true) => a,
                _ => continue,
            };
            attached.push((other, y.0, y.1, y.2));
            nodes.extend([out, other]);
        }
        branches.push(attached);
    }
    nodes.sort_unstable();
    nodes.dedup();
    let transfers = node_transfers(system, inp, freqs_hz, &nodes)?;
    let at = |node: usize, k: usize| match nodes.binary_search(&node) {
        Ok(i) => transfers[i][k],
        Err(_) => Complex64::new(0.0, 0.0),
    };
    Ok(levels
        .iter()
        .zip(&branches)
        .map(|(level, attached)| {
            freqs_hz
                .iter()
                .enumerate()
                .map(|(k, &f)| {
                    let s = Complex64::new(0.0, std::f64::consts::TAU * f);
                    attached
                        .iter()
                        .map(|&(other, g, c, l_inv)| {
                            // The inductor's term only where there is
                            // one: (1/L)/s is 0/0 at DC otherwise.
                            let y = match l_inv {
                                0.0 => g + s * c,
                                _ => g + s * c + l_inv / s,
                            };
                            (at(level.out_node, k) - at(other, k)) * y
                        })
                        .sum()
                })
                .collect()
        })
        .collect())
}

/// |V(out)/V(inp)| for each of `outs` at each of `freqs_hz`, one row per
/// output.
fn output_gains(
    system: &mut AcSystem,
    inp: usize,
    freqs_hz: &[f64],
    outs: &[usize],
) -> Result<Vec<Vec<f64>>, AnalysisError> {
    Ok(node_transfers(system, inp, freqs_hz, outs)?
        .into_iter()
        .map(|row| row.into_iter().map(|x| x.norm()).collect())
        .collect())
}

/// V(node)/V(inp) for each of `nodes` at each of `freqs_hz`, one row per
/// node, through the fastest exact path: the sparse solver over the
/// grid's span (one solve of every unknown per point, read at each node;
/// its guard sends weak points to the dense LU itself), or the dense
/// solver's node voltages where no sparse solver can be built
/// (`tests/fast.rs` holds the two paths to 1e-12 of each other).
fn node_transfers(
    system: &mut AcSystem,
    inp: usize,
    freqs_hz: &[f64],
    nodes: &[usize],
) -> Result<Vec<Vec<Complex64>>, AnalysisError> {
    let lo = freqs_hz.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = freqs_hz.iter().copied().fold(0.0, f64::max);
    let mut rows = vec![vec![Complex64::new(0.0, 0.0); freqs_hz.len()]; nodes.len()];
    let at = |x: &dyn Fn(usize) -> Complex64, node: usize| match node {
        0 => Complex64::new(0.0, 0.0),
        _ => x(node),
    };
    let mut zero_input = None;
    let mut fill = |k: usize, voltage: &dyn Fn(usize) -> Complex64| {
        let vin = at(voltage, inp);
        if vin.norm() == 0.0 {
            zero_input.get_or_insert(freqs_hz[k]);
            return;
        }
        for (row, &node) in rows.iter_mut().zip(nodes) {
            row[k] = at(voltage, node) / vin;
        }
    };
    let sparse = match lo > 0.0 {
        true => SparseAc::new(system, lo, hi).ok(),
        false => None,
    };
    match sparse {
        Some(mut sparse) => {
            sparse.solution_sweep(freqs_hz, |k, x| fill(k, &|node| x[node - 1]))?;
        }
        None => {
            for (k, &f) in freqs_hz.iter().enumerate() {
                let v = system.node_voltages(f)?;
                fill(k, &|node| v[node]);
            }
        }
    }
    match zero_input {
        Some(freq_hz) => Err(CircuitError::ZeroVoltage { node: inp, freq_hz }.into()),
        None => Ok(rows),
    }
}

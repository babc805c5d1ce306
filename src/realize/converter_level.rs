//! Each converter's impedance level chosen for dynamic range.
//!
//! The level freedom of a GIC chain (Z2..Z5 times k, see
//! [`crate::active::chain`]) keeps what the converter realizes and every
//! op-amp output voltage (they follow from impedance ratios), so the
//! output swing and slew limits do not move. Two things do:
//! - the chain's own noise: with ideal op-amps a resistor of Z2..Z5
//!   contributes 4kT k R through an unchanged transfer, and op-amp input
//!   current noise at the chain's inner nodes flows through impedances
//!   k times larger, so the converter's output noise power is exactly
//!   A + B k + C k^2 (A: op-amp voltage noise, Z1, the current noise at
//!   port 1);
//! - the current each of its op-amps delivers, P(f) + Q(f)/k (P through
//!   Z1, which the level leaves alone; Q through Z2..Z5).
//!
//! A lower level is quieter but loads the op-amps harder, and the largest
//! input (at which an op-amp reaches its swing, slew rate or output
//! current) falls once an op-amp's current binds. With the noise and
//! current of every converter found at three common levels (k = 1/2, 1, 2
//! about the nearest capacitor values: exact fits with ideal op-amps),
//! the choice over every converter's capacitor-series values is exact:
//! the noise is a sum over the converters and the largest input a
//! minimum, so for a given largest input T each converter takes its
//! quietest value whose current still allows T, independently of the
//! others; every T that can decide is one of the candidates' own limits
//! (or the swing and slew limit), and the one with the widest dynamic
//! range wins.

use std::collections::HashMap;

use num_complex::Complex64;

use super::{converters, rescale, Converter, PartsSnapError, RANGE_SLACK};
use crate::active::chain::{self, is_capacitor, value};
use crate::active::ActiveBuild;
use crate::analysis::{
    input_limits_v, integrate, level_traces, opamp_levels, output_currents, output_noise,
};
use crate::circuit::{AcSystem, Netlist, OpAmpNoise};
use crate::parts::PartsChoice;

/// A dynamic-range gain below this, dB, leaves every converter on its
/// nearest capacitor values: moving parts for less is not worth a
/// changed bill of materials.
pub const MIN_GAIN_DB: f64 = 0.1;

/// The common levels the noise and currents are fitted from.
const FIT_LEVELS: [f64; 3] = [0.5, 1.0, 2.0];

/// What the converter levels are chosen against: the noise integral (a
/// band grid with its power weighting) and the op-amps' limits.
#[derive(Debug, Clone, PartialEq)]
pub struct LevelGoal {
    /// The grid the noise is integrated over, Hz (ascending).
    pub noise_grid_hz: Vec<f64>,
    /// The power weighting at each point of it (1 for none).
    pub noise_weight: Vec<f64>,
    /// The op-amps' input noise.
    pub opamp_noise: OpAmpNoise,
    /// The resistors' temperature, K.
    pub temperature_k: f64,
    /// The grid the op-amp levels and currents are searched on, Hz.
    pub level_grid_hz: Vec<f64>,
    /// Largest output swing, V peak.
    pub swing_v: f64,
    /// Slew rate, V/s.
    pub slew_v_per_s: f64,
    /// Largest output current, A peak.
    pub output_current_a: f64,
}

/// One converter's level.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ConverterLevel {
    /// The passive element it replaces.
    pub replaces: String,
    /// Its level capacitor (the first capacitor of Z2..Z5).
    pub capacitor: String,
    /// Its level capacitor at the capacitor-series value nearest to the
    /// exact build's, farad.
    pub nearest_f: f64,
    /// The value chosen, farad.
    pub chosen_f: f64,
    /// The impedance level of Z2..Z5 against the nearest values: the
    /// nearest capacitance over the chosen one (below 1 is a lower
    /// impedance).
    pub level: f64,
    #[serde(skip)]
    stage: usize,
}

/// The converters' levels and what they gain, all computed on the exact
/// values before snapping (the build on parts' own noise and dynamic
/// range are in its noise figures).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ConverterLevels {
    /// Every converter with a level capacitor, in stage order.
    pub converters: Vec<ConverterLevel>,
    /// The output noise lower than with the nearest values by, dB.
    pub noise_gain_db: f64,
    /// The largest input lower than with the nearest values by, dB
    /// (positive where the quieter levels took current headroom).
    pub input_loss_db: f64,
    /// The dynamic range wider than with the nearest values by, dB.
    pub gain_db: f64,
    /// Whether the chosen values are used (the gain reaches
    /// [`MIN_GAIN_DB`]); otherwise every converter keeps its nearest.
    pub used: bool,
    /// Why no level was chosen, when the noise or current analysis
    /// behind the choice failed (the build then keeps the nearest values
    /// rather than failing).
    pub not_chosen: Option<String>,
}

impl ConverterLevels {
    /// Every converter on its nearest values, because choosing failed.
    pub fn unchosen(reason: String) -> ConverterLevels {
        ConverterLevels {
            converters: Vec::new(),
            noise_gain_db: 0.0,
            input_loss_db: 0.0,
            gain_db: 0.0,
            used: false,
            not_chosen: Some(reason),
        }
    }

    /// The level capacitor chosen for the converter of stage `stage`,
    /// if it moves.
    pub fn chosen_f(&self, stage: usize) -> Option<f64> {
        let c = self.converters.iter().find(|c| c.stage == stage)?;
        self.used.then_some(c.chosen_f)
    }
}

/// One converter's candidate levels with their fitted noise and the
/// largest input their currents allow.
struct Fitted {
    /// Candidate level capacitors, farad (series values in range).
    farads: Vec<f64>,
    /// The level k of each (nearest capacitance over the candidate's).
    levels: Vec<f64>,
    /// Its sources' output noise power at each, V^2.
    noise_v2: Vec<f64>,
    /// The largest input (V peak) its op-amps' currents allow at each.
    input_v: Vec<f64>,
}

impl Fitted {
    /// The quietest candidate allowing an input of `t` V peak.
    fn quietest_allowing(&self, t: f64) -> Option<usize> {
        (0..self.levels.len())
            .filter(|&i| self.input_v[i] >= t)
            .min_by(|&a, &b| self.noise_v2[a].total_cmp(&self.noise_v2[b]))
    }

    /// The candidate at the nearest values (k = 1; [`candidates`] always
    /// holds it).
    fn nearest(&self) -> usize {
        self.levels.iter().position(|&k| k == 1.0).unwrap_or(0)
    }
}

/// The noise and current of the network with every converter at a
/// common level, and what stays fixed.
struct Fits {
    /// Per converter: its sources' output noise power at the three
    /// [`FIT_LEVELS`], V^2.
    noise_v2: Vec<[f64; 3]>,
    /// The output noise power of every other source, V^2.
    fixed_noise_v2: f64,
    /// Per converter: (P, Q) of each of its op-amps' output current
    /// P + Q/k per input volt at each level-grid point.
    currents: Vec<Vec<(Complex64, Complex64)>>,
    /// The largest input (V peak) the swing, the slew rate and the other
    /// op-amps' currents allow.
    fixed_input_v: f64,
}

/// Chooses each converter's level capacitor among the capacitor-series
/// values in range for the widest dynamic range (see the module
/// documentation), keeping its loop resistors within the resistor range
/// (or no further outside it than the nearest values put them).
pub fn choose_levels(
    build: &ActiveBuild,
    choice: &PartsChoice,
    goal: &LevelGoal,
) -> Result<ConverterLevels, PartsSnapError> {
    let (base, _) = rescale(build, &converters(&build.stages), choice, None)?;
    let free: Vec<Converter> = converters(&build.stages)
        .into_iter()
        .filter(|c| chain::level_capacitor(c.chains, &build.netlist).is_some())
        .collect();
    let fits = fit(build, &base, &free, goal)?;
    let fitted: Vec<Fitted> = free
        .iter()
        .zip(&fits.noise_v2)
        .zip(&fits.currents)
        .map(|((c, &y), pq)| {
            let [a, b, q2] = quadratic_through(y);
            let farads = candidates(c, &base, choice);
            let nearest =
                chain::level_capacitor(c.chains, &base).map_or(f64::NAN, |i| value(&base, i));
            let levels: Vec<f64> = farads.iter().map(|&f| nearest / f).collect();
            Fitted {
                noise_v2: levels
                    .iter()
                    .map(|k| (a + b * k + q2 * k * k).max(0.0))
                    .collect(),
                input_v: levels
                    .iter()
                    .map(|&k| {
                        pq.iter()
                            .map(|(p, q)| goal.output_current_a / (p + q / k).norm())
                            .fold(f64::INFINITY, f64::min)
                    })
                    .collect(),
                farads,
                levels,
            }
        })
        .collect();
    // (dynamic range in dB over an arbitrary reference, largest input,
    // noise power) with candidate `picks[j]` for converter j.
    let outcome = |picks: &[usize]| {
        let input = fitted
            .iter()
            .zip(picks)
            .map(|(c, &i)| c.input_v[i])
            .fold(fits.fixed_input_v, f64::min);
        let noise = fits.fixed_noise_v2
            + fitted
                .iter()
                .zip(picks)
                .map(|(c, &i)| c.noise_v2[i])
                .sum::<f64>();
        (20.0 * input.log10() - 10.0 * noise.log10(), input, noise)
    };
    // Every converter on the nearest values, then each candidate largest
    // input t in turn with every converter on its quietest level allowing
    // it.
    let nearest: Vec<usize> = fitted.iter().map(Fitted::nearest).collect();
    let at_nearest = outcome(&nearest);
    let mut best = (at_nearest, nearest);
    let thresholds = fitted
        .iter()
        .flat_map(|c| c.input_v.iter().copied())
        .chain([fits.fixed_input_v])
        .filter(|&t| t <= fits.fixed_input_v);
    for t in thresholds {
        let picks: Option<Vec<usize>> = fitted.iter().map(|c| c.quietest_allowing(t)).collect();
        if let Some(picks) = picks {
            let o = outcome(&picks);
            if o.0 > best.0 .0 {
                best = (o, picks);
            }
        }
    }
    let ((db, input, noise), picks) = best;
    let gain_db = db - at_nearest.0;
    Ok(ConverterLevels {
        converters: free
            .iter()
            .zip(&fitted)
            .zip(&picks)
            .map(|((c, f), &i)| ConverterLevel {
                replaces: c.replaces.to_string(),
                capacitor: chain::level_capacitor(c.chains, &base)
                    .map(|i| base.elements[i].name().to_string())
                    .unwrap_or_default(),
                nearest_f: f.farads[f.nearest()],
                chosen_f: f.farads[i],
                level: f.levels[i],
                stage: c.stage,
            })
            .collect(),
        noise_gain_db: 10.0 * (at_nearest.2 / noise).log10(),
        input_loss_db: 20.0 * (at_nearest.1 / input).log10(),
        gain_db,
        used: gain_db >= MIN_GAIN_DB,
        not_chosen: None,
    })
}

/// The noise and currents of `base` with every converter of `converters`
/// at each of [`FIT_LEVELS`] (currents from the first two: I = P + Q/k at
/// k = 1 and 2 gives Q = 2 (I1 - I2), P = I1 - Q), each source and op-amp
/// assigned to its converter by the names its stage lists.
fn fit(
    build: &ActiveBuild,
    base: &Netlist,
    converters: &[Converter],
    goal: &LevelGoal,
) -> Result<Fits, PartsSnapError> {
    let owner: HashMap<&str, usize> = converters
        .iter()
        .enumerate()
        .flat_map(|(j, c)| {
            let stage = &build.stages[c.stage];
            stage
                .elements
                .iter()
                .chain(&stage.opamps)
                .map(move |name| (name.as_str(), j))
        })
        .collect();
    let mut at_levels: Vec<Netlist> = Vec::with_capacity(FIT_LEVELS.len());
    for k in FIT_LEVELS {
        let mut n = base.clone();
        for c in converters {
            chain::scale_level(c.chains, &mut n, k)?;
        }
        at_levels.push(n);
    }
    let mut fits = Fits {
        noise_v2: vec![[0.0; 3]; converters.len()],
        fixed_noise_v2: 0.0,
        currents: vec![Vec::new(); converters.len()],
        fixed_input_v: f64::INFINITY,
    };
    for (f, n) in at_levels.iter().enumerate() {
        let out = n.require_node("out")?;
        let grid = &goal.noise_grid_hz;
        let s = output_noise(n, out, grid, &goal.opamp_noise, goal.temperature_k)?;
        for (source, power) in s.sources.iter().zip(&s.source_v2_per_hz) {
            let weighted: Vec<f64> = power
                .iter()
                .zip(&goal.noise_weight)
                .map(|(p, w)| p * w)
                .collect();
            let v2 = integrate(grid, &weighted, |_| 1.0);
            match owner.get(source.designator.as_str()) {
                Some(&j) => fits.noise_v2[j][f] += v2,
                None if FIT_LEVELS[f] == 1.0 => fits.fixed_noise_v2 += v2,
                None => {}
            }
        }
    }
    let inp = base.require_node("in")?;
    let grid = &goal.level_grid_hz;
    let mut system = AcSystem::new(&at_levels[1])?;
    let opamps = opamp_levels(&mut system, inp, grid, goal.swing_v)?;
    let at_one = output_currents(&mut system, inp, grid, &opamps)?;
    for trace in level_traces(&mut system, inp, grid, &opamps)? {
        for (&f, &gain_db) in grid.iter().zip(&trace) {
            let gain = 10f64.powf(gain_db / 20.0);
            let [by_swing, by_slew] = input_limits_v(gain, f, goal.swing_v, goal.slew_v_per_s);
            fits.fixed_input_v = fits.fixed_input_v.min(by_swing).min(by_slew);
        }
    }
    let at_two = output_currents(&mut AcSystem::new(&at_levels[2])?, inp, grid, &opamps)?;
    for ((opamp, one), two) in opamps.iter().zip(&at_one).zip(&at_two) {
        let pq = one.iter().zip(two).map(|(&i1, &i2)| {
            let q = (i1 - i2) * 2.0;
            (i1 - q, q)
        });
        match owner.get(opamp.name.as_str()) {
            Some(&j) => fits.currents[j].extend(pq),
            None => {
                for (p, q) in pq {
                    fits.fixed_input_v = fits
                        .fixed_input_v
                        .min(goal.output_current_a / (p + q).norm());
                }
            }
        }
    }
    Ok(fits)
}

/// A + B k + C k^2 through the values `y` at [`FIT_LEVELS`] (1/2, 1, 2).
fn quadratic_through(y: [f64; 3]) -> [f64; 3] {
    let c = (y[2] - 3.0 * y[1] + 2.0 * y[0]) / 1.5;
    let b = 2.0 * (y[1] - y[0]) - 1.5 * c;
    [y[1] - b - c, b, c]
}

/// The level capacitors a converter may take: each capacitor-series
/// value in range (the nearest always among them), keeping the loop
/// resistors within the resistor range, or no further outside it than the
/// nearest values put them.
fn candidates(c: &Converter, base: &Netlist, choice: &PartsChoice) -> Vec<f64> {
    let Some(cap) = chain::level_capacitor(c.chains, base) else {
        return Vec::new();
    };
    let nearest = value(base, cap);
    let loop_ohm: Vec<f64> = c
        .chains
        .iter()
        .flat_map(|ch| ch.z[1..].iter().copied())
        .filter(|&i| !is_capacitor(base, i))
        .map(|i| value(base, i))
        .collect();
    let lowest = loop_ohm.iter().copied().fold(f64::INFINITY, f64::min);
    let highest = loop_ohm.iter().copied().fold(0.0, f64::max);
    let (low_ohm, high_ohm) = choice.resistor_range_ohm;
    let (low_f, high_f) = choice.capacitor_range_f;
    let mut farads: Vec<f64> = choice
        .capacitor_series
        .between(low_f, high_f)
        .filter(|&farad| {
            let k = nearest / farad;
            (k * lowest >= low_ohm.min(lowest) * (1.0 - RANGE_SLACK))
                && (k * highest <= high_ohm.max(highest) * (1.0 + RANGE_SLACK))
        })
        .collect();
    if !farads.contains(&nearest) {
        farads.push(nearest);
    }
    farads
}

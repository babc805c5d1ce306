//! The figures an audio or instrumentation designer judges a filter by
//! beside its response: output noise (per build, with the top sources of
//! the build on parts), dynamic range (the largest input before an op-amp
//! clips or slews, over the input-referred noise) and the step response
//! (overshoot, rise time, settling times).

use super::{ActiveDesign, Build, Design, DesignError};
use crate::analysis::{
    a_weighting, input_limits_v, integrate, level_traces, noise_band_grid, opamp_levels,
    output_currents, output_noise, step_figures, step_modes, NoiseKind, NoiseSpectrum, StepFigures,
};
use crate::circuit::{log_grid, AcSystem, Netlist};
use crate::realize::{snap_build, LevelGoal};
use crate::spec::Weighting;

/// Points of the noise charts and `noise.csv`, log-spaced over the view
/// and the noise band.
pub const NOISE_CHART_POINTS: usize = 400;

/// How many sources of the build on parts are named.
pub const TOP_CONTRIBUTORS: usize = 5;

/// Sources below this share of a build's noise power are not named
/// (0.05 %: they print as 0.0 %).
const MIN_SHARE: f64 = 5e-4;

/// Points of the step chart and `step.csv`.
pub const STEP_CHART_POINTS: usize = 1000;

/// One source's share of a build's integrated output noise.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Contribution {
    /// The element.
    pub designator: String,
    /// What kind of noise.
    pub kind: NoiseKind,
    /// Its integrated output noise, V rms.
    pub output_v_rms: f64,
    /// Its share of the total output noise power, percent.
    pub share_pct: f64,
}

/// One build's integrated noise.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BuildNoise {
    /// Integrated (and weighted, if asked) output noise, V rms.
    pub output_v_rms: f64,
    /// The same referred to the input: over the passband gain, V rms.
    pub input_v_rms: f64,
    /// The sources with the largest shares, largest first.
    pub top: Vec<Contribution>,
}

/// What limits the largest input.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Headroom {
    /// An op-amp output reaches the stated swing.
    Swing,
    /// An op-amp output's peak slope 2 pi f V reaches the slew rate.
    Slew,
    /// The current an op-amp output delivers into the network reaches
    /// its largest output current.
    Current,
}

impl std::fmt::Display for Headroom {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Headroom::Swing => "output swing",
            Headroom::Slew => "slew rate",
            Headroom::Current => "output current",
        })
    }
}

/// The dynamic range of the active on parts build.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct DynamicRange {
    /// The largest sine at the input before an op-amp clips or slews, V
    /// peak.
    pub max_input_v_peak: f64,
    /// The op-amp that limits it.
    pub limited_by: String,
    /// How.
    pub headroom: Headroom,
    /// At which input frequency, Hz.
    pub at_hz: f64,
    /// The largest sine's rms over the input-referred noise, dB.
    pub range_db: f64,
    /// The source that dominates the noise.
    pub noisiest: Option<String>,
}

/// What the converter levels gain, measured on the builds on parts.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct LevelsGain {
    /// The output noise lower by, dB.
    pub noise_db: f64,
    /// The dynamic range wider by, dB.
    pub range_db: f64,
}

/// The output noise of the three builds.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NoiseFigures {
    /// The band integrated over, Hz.
    pub band_hz: [f64; 2],
    /// Its weighting.
    pub weighting: Weighting,
    /// The resistors' temperature, K.
    pub temperature_k: f64,
    /// The passive ideal (its resistors only).
    pub passive_ideal: BuildNoise,
    /// The active exact build.
    pub active_exact: BuildNoise,
    /// The active on parts build.
    pub active_on_parts: BuildNoise,
    /// The active on parts build's dynamic range (`None` without op-amps).
    pub dynamic_range: Option<DynamicRange>,
    /// The op-amps' input noise the figures assume.
    pub opamp: crate::circuit::OpAmpNoise,
    /// Their slew rate, V/s.
    pub slew_v_per_s: f64,
    /// Their output swing, V peak.
    pub swing_v_peak: f64,
    /// Whether the noise is the default op-amp's (an assumption: the
    /// design file gave none of its keys).
    pub noise_assumed: bool,
    /// Whether the slew rate is the default op-amp's.
    pub slew_assumed: bool,
    /// Their largest output current, A peak.
    pub output_current_a: f64,
    /// Whether it is the default op-amp's.
    pub current_assumed: bool,
    /// Each converter's level on parts, chosen for dynamic range.
    pub levels: crate::realize::ConverterLevels,
    /// The converter resolution of `[adc] bits`, if given: a dynamic
    /// range below its ideal SNR is worth a note.
    pub adc_bits: Option<u32>,
    /// What the chosen levels gain on the build on parts, against the
    /// same build with every converter on its nearest capacitor values
    /// (`None` where the levels did not move).
    pub levels_gain: Option<LevelsGain>,
    /// The densities over the chart grid.
    #[serde(skip)]
    pub chart: NoiseChart,
}

/// Output noise densities for the charts and `noise.csv`, V/sqrt(Hz).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct NoiseChart {
    /// Frequencies, Hz.
    pub freq_hz: Vec<f64>,
    /// The passive ideal.
    pub passive_ideal: Vec<f64>,
    /// The active exact build.
    pub active_exact: Vec<f64>,
    /// The active on parts build.
    pub active_on_parts: Vec<f64>,
    /// The top sources of the active on parts build: (designator, kind,
    /// density), in the order of [`BuildNoise::top`].
    pub top: Vec<(String, NoiseKind, Vec<f64>)>,
}

/// The step responses of the three builds; a build whose modes could not
/// be found (see `circuit::Modes`: the generative test meets about one
/// design in 3,000 whose expansion misses the solved transfer) has none,
/// and says why in `not_computed`, rather than the whole design failing.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct StepReport {
    /// The converter resolution the half-LSB settling is for, if given.
    pub adc_bits: Option<u32>,
    /// The passive ideal.
    pub passive_ideal: Option<StepFigures>,
    /// The active exact build.
    pub active_exact: Option<StepFigures>,
    /// The active on parts build.
    pub active_on_parts: Option<StepFigures>,
    /// The builds without figures, and why.
    pub not_computed: Vec<NotComputed>,
    /// The responses to a 1 V step over the chart's times.
    #[serde(skip)]
    pub chart: StepChart,
}

/// A build whose step response could not be computed.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct NotComputed {
    /// The build.
    pub build: super::Build,
    /// Why, in words.
    pub reason: String,
}

/// Step responses for the chart and `step.csv`, V for a 1 V step (NaN
/// for a build without one).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct StepChart {
    /// Times, s.
    pub time_s: Vec<f64>,
    /// The passive ideal.
    pub passive_ideal: Vec<f64>,
    /// The active exact build.
    pub active_exact: Vec<f64>,
    /// The active on parts build.
    pub active_on_parts: Vec<f64>,
}

/// The power weighting of `weighting` at `f` Hz.
fn weight(weighting: Weighting, f: f64) -> f64 {
    match weighting {
        Weighting::None => 1.0,
        Weighting::A => a_weighting(f),
    }
}

/// The integrated noise of one spectrum and its top sources.
fn build_noise(s: &NoiseSpectrum, weighting: Weighting, passband_v: f64) -> BuildNoise {
    let weight = |f: f64| weight(weighting, f);
    let total = integrate(&s.freq_hz, &s.total_v2_per_hz, weight);
    let mut shares: Vec<(usize, f64)> = s
        .source_v2_per_hz
        .iter()
        .map(|p| integrate(&s.freq_hz, p, weight))
        .enumerate()
        .collect();
    shares.sort_by(|a, b| b.1.total_cmp(&a.1));
    BuildNoise {
        output_v_rms: total.sqrt(),
        input_v_rms: total.sqrt() / passband_v,
        top: shares
            .into_iter()
            .take(TOP_CONTRIBUTORS)
            .filter(|&(_, v2)| v2 >= MIN_SHARE * total)
            .map(|(i, v2)| Contribution {
                designator: s.sources[i].designator.clone(),
                kind: s.sources[i].kind,
                output_v_rms: v2.sqrt(),
                share_pct: if total > 0.0 { 100.0 * v2 / total } else { 0.0 },
            })
            .collect(),
    }
}

impl Design {
    /// The band noise is integrated over: the design file's, else the
    /// span of the passbands within the view (a passband from DC from the
    /// view's lower end, a decade below the lowest edge, as the charts
    /// show it; 1/f noise through the high resistances of some builds
    /// grows without bound towards DC, so a band reaching lower is the
    /// design file's choice to make).
    pub fn noise_band_hz(&self) -> [f64; 2] {
        if let Some(band) = self.spec.noise.band_hz {
            return band;
        }
        let passbands = self.passbands_hz();
        let lo = passbands.iter().map(|b| b[0]).fold(f64::INFINITY, f64::min);
        let hi = passbands.iter().map(|b| b[1]).fold(0.0, f64::max);
        [lo.max(self.view_hz().0), hi]
    }

    /// What each converter's level on parts is chosen against: the noise
    /// band and weighting of the noise figures, the level grid and the
    /// op-amps' limits of the dynamic range.
    pub fn level_goal(&self) -> Result<LevelGoal, DesignError> {
        let band_hz = self.noise_band_hz();
        let noise_grid_hz = noise_band_grid(band_hz[0], band_hz[1]);
        let noise_weight = noise_grid_hz
            .iter()
            .map(|&f| weight(self.spec.noise.weighting, f))
            .collect();
        let (lo, hi) = self.view_hz();
        let opamp = &self.spec.opamp;
        Ok(LevelGoal {
            noise_grid_hz,
            noise_weight,
            opamp_noise: opamp.noise,
            temperature_k: self.spec.noise.temperature_k,
            level_grid_hz: log_grid(lo, hi, crate::analysis::LEVEL_POINTS)
                .map_err(|cause| self.circuit_error(cause))?,
            swing_v: opamp.swing_v,
            slew_v_per_s: opamp.slew_v_per_s,
            output_current_a: opamp.output_current_a,
        })
    }

    /// The passband level, V/V.
    fn passband_v(&self) -> f64 {
        10f64.powf(self.passband_level_db() / 20.0)
    }

    /// The output noise of `netlist` at `freqs_hz`.
    fn noise_of(&self, netlist: &Netlist, freqs_hz: &[f64]) -> Result<NoiseSpectrum, DesignError> {
        let out = netlist
            .require_node("out")
            .map_err(|cause| self.circuit_error(cause))?;
        output_noise(
            netlist,
            out,
            freqs_hz,
            &self.spec.opamp.noise,
            self.spec.noise.temperature_k,
        )
        .map_err(|cause| self.analysis_error(cause))
    }

    /// The output noise of the three builds: integrated over the noise
    /// band, the top sources, the densities for the charts, and the
    /// dynamic range of the build on parts.
    pub fn noise_figures(&self, active: &ActiveDesign) -> Result<NoiseFigures, DesignError> {
        let band_hz = self.noise_band_hz();
        let weighting = self.spec.noise.weighting;
        let passband_v = self.passband_v();
        let grid = noise_band_grid(band_hz[0], band_hz[1]);
        let builds = [
            &self.passive,
            &active.build.netlist,
            &active.on_parts.netlist,
        ];
        let integrate = |n: &Netlist| {
            self.noise_of(n, &grid)
                .map(|s| build_noise(&s, weighting, passband_v))
        };
        let [passive_ideal, active_exact, active_on_parts] = builds.map(integrate);
        let (passive_ideal, active_exact, active_on_parts) =
            (passive_ideal?, active_exact?, active_on_parts?);
        let (lo, hi) = self.view_hz();
        let chart_grid = log_grid(lo.min(band_hz[0]), hi.max(band_hz[1]), NOISE_CHART_POINTS)
            .map_err(|cause| self.circuit_error(cause))?;
        let [p, e, o] = builds.map(|n| self.noise_of(n, &chart_grid));
        let (p, e, o) = (p?, e?, o?);
        let density = |v2: &[f64]| v2.iter().map(|p| p.sqrt()).collect::<Vec<f64>>();
        let top = active_on_parts
            .top
            .iter()
            .filter_map(|c| {
                let i = o
                    .sources
                    .iter()
                    .position(|s| s.designator == c.designator && s.kind == c.kind)?;
                Some((
                    c.designator.clone(),
                    c.kind,
                    density(&o.source_v2_per_hz[i]),
                ))
            })
            .collect();
        let (p, e, o) = (
            density(&p.total_v2_per_hz),
            density(&e.total_v2_per_hz),
            density(&o.total_v2_per_hz),
        );
        let dynamic_range = self.dynamic_range(&active.on_parts.netlist, &active_on_parts)?;
        let levels_gain = match (&dynamic_range, active.levels.used) {
            (Some(range), true) => {
                let nearest = snap_build(
                    &self.passive,
                    &active.build,
                    &self.spec.parts,
                    &self.passbands_hz(),
                    None,
                )
                .map_err(|cause| DesignError::Parts {
                    file: self.spec.file.clone(),
                    cause,
                })?;
                let noise = integrate(&nearest.netlist)?;
                let nearest_range = self.dynamic_range(&nearest.netlist, &noise)?;
                nearest_range.map(|r| LevelsGain {
                    noise_db: 20.0 * (noise.output_v_rms / active_on_parts.output_v_rms).log10(),
                    range_db: range.range_db - r.range_db,
                })
            }
            _ => None,
        };
        let spec = &self.spec.opamp;
        let default = crate::spec::OpAmpSpec::default();
        Ok(NoiseFigures {
            opamp: spec.noise,
            slew_v_per_s: spec.slew_v_per_s,
            swing_v_peak: spec.swing_v,
            noise_assumed: spec.noise == default.noise,
            slew_assumed: spec.slew_v_per_s == default.slew_v_per_s,
            output_current_a: spec.output_current_a,
            current_assumed: spec.output_current_a == default.output_current_a,
            levels: active.levels.clone(),
            levels_gain,
            adc_bits: self.spec.adc_bits,
            band_hz,
            weighting,
            temperature_k: self.spec.noise.temperature_k,
            passive_ideal,
            active_exact,
            active_on_parts,
            dynamic_range,
            chart: NoiseChart {
                freq_hz: chart_grid,
                passive_ideal: p,
                active_exact: e,
                active_on_parts: o,
                top,
            },
        })
    }

    /// The largest sine at the input of the build on parts before an
    /// op-amp output reaches the swing, its slope the slew rate or its
    /// current the largest output current: at each frequency of the level
    /// grid V_in <= min(swing, SR / (2 pi f)) / |gain to that output|
    /// (common practice) and V_in <= I_max / |current per input volt|,
    /// over the input-referred noise. `None` for a build without op-amps.
    fn dynamic_range(
        &self,
        parts: &Netlist,
        noise: &BuildNoise,
    ) -> Result<Option<DynamicRange>, DesignError> {
        let circuit = |cause| self.circuit_error(cause);
        let analysis = |cause| self.analysis_error(cause);
        let inp = parts.require_node("in").map_err(circuit)?;
        let mut system = AcSystem::new(parts).map_err(circuit)?;
        let (lo, hi) = self.view_hz();
        let grid = log_grid(lo, hi, crate::analysis::LEVEL_POINTS).map_err(circuit)?;
        let opamp = &self.spec.opamp;
        let levels = opamp_levels(&mut system, inp, &grid, opamp.swing_v).map_err(analysis)?;
        if levels.is_empty() {
            return Ok(None);
        }
        let levels = &levels;
        let traces = level_traces(&mut system, inp, &grid, levels).map_err(analysis)?;
        let currents = output_currents(&mut system, inp, &grid, levels).map_err(analysis)?;
        let (swing, slew) = (opamp.swing_v, opamp.slew_v_per_s);
        let mut best: Option<(f64, usize, Headroom, f64)> = None;
        for (k, (trace, current)) in traces.iter().zip(&currents).enumerate() {
            for ((&f, &gain_db), i) in grid.iter().zip(trace).zip(current) {
                let [by_swing, by_slew] =
                    input_limits_v(10f64.powf(gain_db / 20.0), f, swing, slew);
                for (limit, headroom) in [
                    (by_swing, Headroom::Swing),
                    (by_slew, Headroom::Slew),
                    (opamp.output_current_a / i.norm(), Headroom::Current),
                ] {
                    if best.is_none_or(|b| limit < b.0) {
                        best = Some((limit, k, headroom, f));
                    }
                }
            }
        }
        let Some((max_input_v_peak, k, headroom, at_hz)) = best else {
            return Ok(None);
        };
        let rms = max_input_v_peak / std::f64::consts::SQRT_2;
        Ok(Some(DynamicRange {
            max_input_v_peak,
            limited_by: levels[k].name.clone(),
            headroom,
            at_hz,
            range_db: 20.0 * (rms / noise.input_v_rms).log10(),
            noisiest: noise.top.first().map(|c| c.designator.clone()),
        }))
    }

    /// The step responses of the three builds from their modes, with the
    /// design file's converter resolution.
    pub fn step_report(&self, active: &ActiveDesign) -> Result<StepReport, DesignError> {
        let bits = self.spec.adc_bits;
        let passband_v = self.passband_v();
        let builds = [
            (Build::PassiveIdeal, &self.passive),
            (Build::ActiveExact, &active.build.netlist),
            (Build::ActiveOnParts, &active.on_parts.netlist),
        ];
        let found = builds.map(|(build, n)| {
            let modes = crate::active::natural_frequencies(n)
                .map_err(|e| e.to_string())
                .and_then(|roots| step_modes(n, &roots).map_err(|e| e.to_string()));
            (build, modes)
        });
        let not_computed = found
            .iter()
            .filter_map(|(build, m)| {
                m.as_ref().err().map(|reason| NotComputed {
                    build: *build,
                    reason: reason.clone(),
                })
            })
            .collect();
        let modes = found.map(|(_, m)| m.ok());
        let figures = modes
            .each_ref()
            .map(|m| m.as_ref().map(|m| step_figures(m, passband_v, bits)));
        // The chart shows the builds to one and a half times the longest
        // settling to 0.1 % (the slow tails to 0.01 % are in the figures).
        let span_s = 1.5
            * figures
                .iter()
                .flatten()
                .flat_map(|f| f.settling.iter().take(2).filter_map(|x| x.time_s))
                .fold(0.0, f64::max)
                .max(f64::MIN_POSITIVE);
        let time_s: Vec<f64> = (0..STEP_CHART_POINTS)
            .map(|k| span_s * k as f64 / (STEP_CHART_POINTS - 1) as f64)
            .collect();
        let trace = |i: usize| -> Vec<f64> {
            time_s
                .iter()
                .map(|&t| modes[i].as_ref().map_or(f64::NAN, |m| m.step_at(t)))
                .collect()
        };
        let chart = StepChart {
            passive_ideal: trace(0),
            active_exact: trace(1),
            active_on_parts: trace(2),
            time_s: time_s.clone(),
        };
        let [passive_ideal, active_exact, active_on_parts] = figures;
        Ok(StepReport {
            adc_bits: bits,
            passive_ideal,
            active_exact,
            active_on_parts,
            not_computed,
            chart,
        })
    }
}

//! The analyses behind a design's documents, each a function a caller can
//! run alone: chart traces of the three builds, sensitivities and the
//! Monte Carlo yield of the active on parts build.

use super::{ActiveDesign, Design, DesignError};
use crate::active;
use crate::analysis::{
    judged_from_hz, level_traces, monte_carlo, summarize, trace, AnalysisError, BoardJudge,
    BoardRoots, DelayLimit, DelayVerdict, Mask, MaskVerdict, MonteCarlo, MonteCarloResult, Scope,
    SensitivitySummary, SummaryPoints, ToleranceRule, Tuning,
};
use crate::circuit::{band_grid, log_grid, AcSystem, Netlist};
use crate::parts::Tolerance;
use crate::spec::SpreadBound;

/// Points per passband of the worst-case sensitivity search.
pub const SENSITIVITY_POINTS: usize = 50;

/// Points of the response charts.
const CHART_POINTS: usize = 600;

/// Points of the Monte Carlo frequency grid (the mask edges are added).
pub const MONTE_CARLO_POINTS: usize = 200;

/// Points per decade of the Monte Carlo grid below the view, down to
/// [`Design::dc_reach_hz`]: the DC-path step there is first order, and
/// tests/design.rs's `monte_carlo_figures_hold_on_a_finer_grid` holds its
/// figures against this grid doubled twice.
const DC_REACH_POINTS_PER_DECADE: usize = 4;

/// Monte Carlo boards when the design file gives no count, for builds of
/// up to [`DEFAULT_TRIALS_OPAMPS`] op-amps.
pub const DEFAULT_TRIALS: usize = 1000;

/// Op-amps up to which the default is [`DEFAULT_TRIALS`]. Judging a
/// board's stability dominates its cost and grows as the op-amps^2.5
/// (measured per board on one core: 9.6 ms at 34 op-amps, an 11th-order
/// bandstop; 33 ms at 56, a 12th-order elliptic bandstop; 69 ms at 76, a
/// 25th-order bandpass, whose 1,000 default boards took 35 s on two
/// cores). A design runs the count up to six times (the yield, the same
/// boards before tuning, four with one tolerance halved): at 22
/// op-amps, a 7th-order bandstop with a delay limit, 1,000 boards took
/// 9.9 s in all on two cores, the 14-op-amp mains notch 2.4 s. Up to 16
/// op-amps the default stays; beyond, the count shrinks, so a design run
/// without a count stays within a few seconds.
pub const DEFAULT_TRIALS_OPAMPS: usize = 16;

/// The fewest boards a shortened default draws (the largest builds, about
/// 100 op-amps, get 28 by the rule): a rough yield, its count stated
/// beside it.
pub const MIN_DEFAULT_TRIALS: usize = 20;

/// Monte Carlo boards when the design file gives no count, for a build
/// of `opamps` op-amps: [`DEFAULT_TRIALS`], shortened as
/// (DEFAULT_TRIALS_OPAMPS / opamps)^2.5 for larger builds, so that a
/// design run without a count stays within seconds; never below
/// [`MIN_DEFAULT_TRIALS`].
pub fn default_trials(opamps: usize) -> usize {
    if opamps <= DEFAULT_TRIALS_OPAMPS {
        return DEFAULT_TRIALS;
    }
    let scale = (DEFAULT_TRIALS_OPAMPS as f64 / opamps as f64).powf(2.5);
    ((DEFAULT_TRIALS as f64 * scale) as usize).max(MIN_DEFAULT_TRIALS)
}

fn opamps(active: &ActiveDesign) -> usize {
    active
        .on_parts
        .netlist
        .count(crate::circuit::ElementKind::OpAmp)
}

/// How many of the worst trials a run reports.
pub const WORST_TRIALS: usize = 5;

/// Without a stopband edge in the design file, sensitivities "at the
/// stopband edge" are taken where the normalized prototype is at twice
/// its passband edge: a point of the transition band every family has.
const STOPBAND_REFERENCE_RAD_S: f64 = 2.0;

/// One build's response over the chart grid.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BuildTrace {
    /// Gain, dB.
    pub gain_db: Vec<f64>,
    /// Phase, degrees, unwrapped.
    pub phase_deg: Vec<f64>,
    /// Group delay, s, exact (one more solve per point; at an exact
    /// transmission zero its limit, see [`crate::analysis::trace`]).
    pub group_delay_s: Vec<f64>,
}

/// The responses the charts draw.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ChartTraces {
    /// Chart frequencies, Hz.
    pub freq_hz: Vec<f64>,
    /// The passive ideal.
    pub passive_ideal: BuildTrace,
    /// The active exact build.
    pub active_exact: BuildTrace,
    /// The active on parts build.
    pub active_on_parts: BuildTrace,
    /// Gain from the input to each op-amp output of the active on parts
    /// build, dB, by designator, in netlist order.
    pub opamp_gain_db: Vec<(String, Vec<f64>)>,
}

/// Whether `netlist` has an op-amp with a finite gain-bandwidth: one
/// whose GBW a Monte Carlo varies and whose stability it judges.
fn has_finite_gbw(netlist: &Netlist) -> bool {
    netlist.elements.iter().any(
        |e| matches!(e, crate::circuit::Element::OpAmp { model, .. } if model.gbw_hz().is_some()),
    )
}

/// A class of parts whose tolerance the payoff table halves.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum PartClass {
    /// The capacitors outside every converter: the ladder's own (a GIC
    /// build) or the FDNR image's termination capacitors.
    LadderCapacitors,
    /// The capacitors inside the converters.
    ConverterCapacitors,
    /// Every resistor.
    Resistors,
    /// The op-amps' gain-bandwidth.
    OpAmpGbw,
}

impl std::fmt::Display for PartClass {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            PartClass::LadderCapacitors => "ladder capacitors",
            PartClass::ConverterCapacitors => "converter capacitors",
            PartClass::Resistors => "resistors",
            PartClass::OpAmpGbw => "op-amp GBW",
        })
    }
}

/// The yield with one class's tolerance halved.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct TolerancePayoff {
    /// The class.
    pub class: PartClass,
    /// Its tolerance as designed (a fraction; the GBW spread for op-amps).
    pub tolerance: f64,
    /// Halved.
    pub halved_tolerance: f64,
    /// Boards drawn (the same boards as the design's Monte Carlo).
    pub boards: usize,
    /// Boards that meet the specification.
    pub boards_meeting: usize,
    /// Their fraction.
    pub yield_fraction: f64,
}

/// Everything the documents show beyond the builds themselves.
#[derive(Debug, Clone)]
pub struct Analyses {
    /// The chart responses.
    pub traces: ChartTraces,
    /// Sensitivities of the active on parts build.
    pub sensitivity: Vec<SensitivitySummary>,
    /// The Monte Carlo run of the active on parts build, every board
    /// tuned by the tuning procedure.
    pub montecarlo: MonteCarloResult,
    /// The same boards with the trimmers left at their nominal settings,
    /// when the procedure tunes any (else tuning changes nothing).
    pub before_tuning: Option<MonteCarloResult>,
    /// The same boards with one class's tolerance halved at a time.
    pub payoffs: Vec<TolerancePayoff>,
    /// The active exact build against the specification.
    pub active_exact_verdict: MaskVerdict,
    /// The active on parts build against the specification, nominal parts
    /// (the headline).
    pub active_on_parts_verdict: MaskVerdict,
    /// The builds against the delay specification, when there is one.
    pub delay: Option<DelayFigures>,
    /// Output noise of the three builds and the dynamic range.
    pub noise: super::NoiseFigures,
    /// Step responses of the three builds.
    pub step: super::StepReport,
}

/// The three builds against the `[delay]` specification.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct DelayFigures {
    /// The bands and the bound in seconds.
    pub limit: DelayLimit,
    /// The passive ideal.
    pub passive_ideal: DelayVerdict,
    /// The active exact build.
    pub active_exact: DelayVerdict,
    /// The active on parts build (what the headline judges).
    pub active_on_parts: DelayVerdict,
}

/// Gain, phase and exact group delay of `netlist` at `freq_hz`, through
/// the fast exact path of [`trace`].
fn build_trace(netlist: &Netlist, freq_hz: &[f64]) -> Result<BuildTrace, AnalysisError> {
    let t = trace(netlist, freq_hz, true)?;
    Ok(BuildTrace {
        gain_db: t.gain_db,
        phase_deg: t.phase_deg,
        group_delay_s: t.group_delay_s.unwrap_or_default(),
    })
}

impl Design {
    /// The responses of the three builds over the chart grid, and the
    /// op-amp output levels of the active on parts build.
    pub fn chart_traces(&self, active: &ActiveDesign) -> Result<ChartTraces, DesignError> {
        let (lo, hi) = self.view_hz();
        // Down to the lowest point a delay specification judges, which may
        // lie below the view (a band from DC).
        let lo = match &self.spec.delay {
            Some(delay) => super::delay_bands(&self.spec, delay)
                .iter()
                .map(|&band| judged_from_hz(band))
                .fold(lo, f64::min),
            None => lo,
        };
        let grid = log_grid(lo, hi, CHART_POINTS).map_err(|cause| self.circuit_error(cause))?;
        self.traces(active, grid)
    }

    /// The responses of the three builds at `freq_hz` (ascending, Hz), and
    /// the op-amp output levels of the active on parts build.
    pub fn traces(
        &self,
        active: &ActiveDesign,
        freq_hz: Vec<f64>,
    ) -> Result<ChartTraces, DesignError> {
        let circuit = |cause| self.circuit_error(cause);
        let parts = &active.on_parts.netlist;
        let inp = parts.require_node("in").map_err(circuit)?;
        let mut system = AcSystem::new(parts).map_err(circuit)?;
        let levels = &active.on_parts_figures.levels;
        let traces = level_traces(&mut system, inp, &freq_hz, levels)
            .map_err(|cause| self.analysis_error(cause))?;
        let analysis = |cause| self.analysis_error(cause);
        Ok(ChartTraces {
            passive_ideal: build_trace(&self.passive, &freq_hz).map_err(analysis)?,
            active_exact: build_trace(&active.build.netlist, &freq_hz).map_err(analysis)?,
            active_on_parts: build_trace(parts, &freq_hz).map_err(analysis)?,
            opamp_gain_db: levels.iter().map(|l| l.name.clone()).zip(traces).collect(),
            freq_hz,
        })
    }

    /// Sensitivities of `netlist` (a build of this design) to every part
    /// and op-amp GBW: at the passband edge(s), the worst over the
    /// passband, and at the stopband edge(s).
    pub fn sensitivity(&self, netlist: &Netlist) -> Result<Vec<SensitivitySummary>, DesignError> {
        let circuit = |cause| self.circuit_error(cause);
        let (inp, out) = (
            netlist.require_node("in").map_err(circuit)?,
            netlist.require_node("out").map_err(circuit)?,
        );
        let mut system = AcSystem::new(netlist).map_err(circuit)?;
        let band = &self.spec.band;
        let stopband_edges_hz = match band.stopband_edges_hz() {
            edges if edges.is_empty() => band.frequencies_hz(STOPBAND_REFERENCE_RAD_S),
            edges => edges,
        };
        let points = SummaryPoints {
            passband_edges_hz: band.passband_edges_hz(),
            passband_hz: band_grid(&self.passbands_hz(), SENSITIVITY_POINTS).map_err(circuit)?,
            stopband_edges_hz,
        };
        summarize(&mut system, out, inp, &points).map_err(|cause| self.analysis_error(cause))
    }

    /// The Monte Carlo frequency grid: log-spaced over the view, with every
    /// mask edge added so each limit is sampled where it is tightest.
    /// What falls between its points is found by refinement and at each
    /// board's resonances ([`Mask::refined_verdict`]).
    pub fn monte_carlo_grid(&self) -> Result<Vec<f64>, DesignError> {
        let circuit = |cause| self.circuit_error(cause);
        let (lo, hi) = self.view_hz();
        let mut grid = log_grid(lo, hi, MONTE_CARLO_POINTS).map_err(circuit)?;
        if let Some(reach) = self.dc_reach_hz() {
            let decades = (lo / reach).log10().ceil() as usize;
            grid.extend(
                log_grid(reach, lo, decades * DC_REACH_POINTS_PER_DECADE + 1).map_err(circuit)?,
            );
        }
        for l in self.yield_limits().into_iter().chain(self.mask_limits()) {
            grid.extend([l.from_hz, l.to_hz]);
        }
        grid.sort_by(f64::total_cmp);
        grid.dedup();
        Ok(grid)
    }

    /// A relative tolerance with the design file's distribution.
    fn tolerance(&self, relative: f64) -> Result<Tolerance, DesignError> {
        Tolerance::new(relative, self.spec.parts.distribution).map_err(|e| {
            DesignError::Spec(crate::spec::SpecError::Invalid {
                file: self.spec.file.clone(),
                key: "parts",
                got: relative.to_string(),
                expected: e.to_string(),
            })
        })
    }

    /// The tolerance rules of the design file: every resistor, every
    /// capacitor, every op-amp's gain-bandwidth (an active build has no
    /// inductor to vary).
    pub fn tolerance_rules(&self) -> Result<Vec<ToleranceRule>, DesignError> {
        let p = &self.spec.parts;
        let rule = |scope, relative| {
            self.tolerance(relative)
                .map(|tolerance| ToleranceRule { scope, tolerance })
        };
        Ok(vec![
            rule(Scope::Resistors, p.resistor_tolerance)?,
            rule(Scope::Capacitors, p.capacitor_tolerance)?,
            rule(Scope::OpAmpGbw, self.spec.montecarlo.gbw_spread)?,
        ])
    }

    /// The Monte Carlo yield of `active`'s build on parts against the
    /// specification, with the design file's tolerances, and `trials` and
    /// `seed`: every board `tuned` by the tuning procedure, or with its
    /// trimmers left at their nominal settings. Runs on the current rayon
    /// pool; `progress` is told how many trials are done.
    pub fn monte_carlo(
        &self,
        active: &ActiveDesign,
        tuned: bool,
        trials: usize,
        seed: u64,
        progress: Option<&(dyn Fn(usize) + Sync)>,
    ) -> Result<MonteCarloResult, DesignError> {
        self.monte_carlo_tightened(active, tuned, &[], trials, seed, progress)
    }

    /// For each class of the active on parts build's parts, the yield of
    /// the same boards (the same seed: each part's draw within its
    /// tolerance is the same fraction of it, so only the halving differs)
    /// with that class's tolerance halved: where precision pays. A class
    /// without members or without a tolerance is left out.
    pub fn tolerance_payoffs(
        &self,
        active: &ActiveDesign,
        trials: usize,
        seed: u64,
        progress: Option<&(dyn Fn(usize) + Sync)>,
    ) -> Result<Vec<TolerancePayoff>, DesignError> {
        let mut payoffs = Vec::new();
        for (class, scopes, tolerance) in self.payoff_classes(active) {
            let mc = self.monte_carlo_tightened(
                active,
                true,
                &[(scopes, tolerance / 2.0)],
                trials,
                seed,
                progress,
            )?;
            payoffs.push(TolerancePayoff {
                class,
                tolerance,
                halved_tolerance: tolerance / 2.0,
                boards: mc.trials,
                boards_meeting: mc.passed,
                yield_fraction: mc.yield_fraction,
            });
        }
        Ok(payoffs)
    }

    /// [`Design::monte_carlo`] with the tolerances of some parts changed:
    /// each entry's scopes get its tolerance, the rest the design file's.
    pub(super) fn monte_carlo_tightened(
        &self,
        active: &ActiveDesign,
        tuned: bool,
        changes: &[(Vec<Scope>, f64)],
        trials: usize,
        seed: u64,
        progress: Option<&(dyn Fn(usize) + Sync)>,
    ) -> Result<MonteCarloResult, DesignError> {
        let mut rules = self.tolerance_rules()?;
        for (scopes, relative) in changes {
            let tolerance = self.tolerance(*relative)?;
            // Later rules override earlier ones (analysis::ToleranceRule).
            rules.extend(scopes.iter().map(|scope| ToleranceRule {
                scope: scope.clone(),
                tolerance,
            }));
        }
        let tuning = active.on_parts.tuning(tuned);
        self.monte_carlo_with(
            &active.on_parts.netlist,
            &rules,
            &tuning,
            trials,
            seed,
            progress,
        )
    }

    /// The part classes of the active on parts build with members and a
    /// tolerance: each with the scopes that name its members and its
    /// tolerance as designed.
    pub(super) fn payoff_classes(
        &self,
        active: &ActiveDesign,
    ) -> Vec<(PartClass, Vec<Scope>, f64)> {
        let parts = &active.on_parts.netlist;
        let p = &self.spec.parts;
        let in_converters: Vec<&str> = active
            .on_parts
            .stages
            .iter()
            .filter(|s| matches!(s.handles, active::Handles::Converter(_)))
            .flat_map(|s| s.elements.iter().map(String::as_str))
            .collect();
        let capacitors = |converter: bool| -> Vec<Scope> {
            parts
                .elements
                .iter()
                .filter(|e| e.kind() == crate::circuit::ElementKind::Capacitor)
                .filter(|e| in_converters.contains(&e.name()) == converter)
                .map(|e| Scope::Element(e.name().to_string()))
                .collect()
        };
        let dynamic = has_finite_gbw(parts);
        [
            (
                PartClass::LadderCapacitors,
                capacitors(false),
                p.capacitor_tolerance,
            ),
            (
                PartClass::ConverterCapacitors,
                capacitors(true),
                p.capacitor_tolerance,
            ),
            (
                PartClass::Resistors,
                vec![Scope::Resistors],
                p.resistor_tolerance,
            ),
            (
                PartClass::OpAmpGbw,
                if dynamic {
                    vec![Scope::OpAmpGbw]
                } else {
                    Vec::new()
                },
                self.spec.montecarlo.gbw_spread,
            ),
        ]
        .into_iter()
        .filter(|(_, scopes, tolerance)| !scopes.is_empty() && *tolerance > 0.0)
        .collect()
    }

    /// How many Monte Carlo runs [`Design::analyses`] makes of
    /// [`Design::trials`] each: the design's own, the same boards before
    /// tuning when the procedure tunes any trimmer, and one per class of
    /// [`Design::tolerance_payoffs`] (for a progress display).
    pub fn monte_carlo_runs(&self, active: &ActiveDesign) -> usize {
        1 + usize::from(active.on_parts.has_readings()) + self.payoff_classes(active).len()
    }

    /// [`Design::monte_carlo`] with the tolerance rules given.
    fn monte_carlo_with(
        &self,
        netlist: &Netlist,
        rules: &[ToleranceRule],
        tuning: &Tuning,
        trials: usize,
        seed: u64,
        progress: Option<&(dyn Fn(usize) + Sync)>,
    ) -> Result<MonteCarloResult, DesignError> {
        let circuit = |cause| self.circuit_error(cause);
        let analysis = |cause| self.analysis_error(cause);
        let mask = Mask::new(self.yield_limits()).map_err(analysis)?;
        let delay = self.delay_limit()?;
        let freqs = self.monte_carlo_grid()?;
        let system = AcSystem::new(netlist).map_err(circuit)?;
        // Only a network with finite-bandwidth op-amps has a stability
        // verdict (see active::ActiveBuild::stability); every board's
        // resonances are wanted. Roots that cannot be computed count as
        // unstable, the cautious side.
        let dynamic = has_finite_gbw(netlist);
        let judge = |n: &Netlist| match active::roots_and_verdict(n) {
            Ok((roots_rad_s, verdict)) => BoardRoots {
                stable: verdict.stable || !dynamic,
                roots_rad_s,
            },
            Err(_) => BoardRoots {
                stable: false,
                roots_rad_s: Vec::new(),
            },
        };
        let setup = MonteCarlo {
            roots: Some(&judge as BoardJudge),
            out: netlist.require_node("out").map_err(circuit)?,
            inp: netlist.require_node("in").map_err(circuit)?,
            freqs_hz: &freqs,
            rules,
            mask: &mask,
            trials,
            seed,
            worst: WORST_TRIALS,
            delay: delay.as_ref(),
            tuning: Some(tuning),
        };
        monte_carlo(&system, &setup, progress).map_err(analysis)
    }

    /// The `[delay]` specification as a limit: its bands (by default the
    /// passbands within the specification's view) and its bound in
    /// seconds (a percentage is of the passive ideal's longest delay over
    /// the bands); `None` without one.
    pub fn delay_limit(&self) -> Result<Option<DelayLimit>, DesignError> {
        let Some(spec) = &self.spec.delay else {
            return Ok(None);
        };
        let analysis = |cause| self.analysis_error(cause);
        let bands = super::delay_bands(&self.spec, spec);
        let max_spread_s = match spec.bound {
            SpreadBound::Seconds(s) => s,
            SpreadBound::Percent(pct) => {
                let probe = DelayLimit::new(bands.clone(), 1.0).map_err(analysis)?;
                let grid = probe.grid();
                let delay = self.delays(&self.passive, &grid)?;
                probe.verdict(&grid, &delay).longest_s * pct / 100.0
            }
        };
        DelayLimit::new(bands, max_spread_s)
            .map(Some)
            .map_err(analysis)
    }

    /// The exact group delay of `netlist` at `grid`, seconds.
    fn delays(&self, netlist: &Netlist, grid: &[f64]) -> Result<Vec<f64>, DesignError> {
        trace(netlist, grid, true)
            .map(|t| t.group_delay_s.unwrap_or_default())
            .map_err(|cause| self.analysis_error(cause))
    }

    /// The three builds against the delay specification, if any.
    pub fn delay_figures(
        &self,
        active: &ActiveDesign,
    ) -> Result<Option<DelayFigures>, DesignError> {
        let Some(limit) = self.delay_limit()? else {
            return Ok(None);
        };
        let grid = limit.grid();
        let judge =
            |n: &Netlist| Ok::<_, DesignError>(limit.verdict(&grid, &self.delays(n, &grid)?));
        Ok(Some(DelayFigures {
            passive_ideal: judge(&self.passive)?,
            active_exact: judge(&active.build.netlist)?,
            active_on_parts: judge(&active.on_parts.netlist)?,
            limit,
        }))
    }

    /// How `netlist` (a build of this design) stands against the
    /// specification: on the Monte Carlo grid and at its resonances,
    /// refined around the closest point ([`Mask::refined_verdict`]).
    pub fn verdict(&self, netlist: &Netlist) -> Result<MaskVerdict, DesignError> {
        let analysis = |cause| self.analysis_error(cause);
        let mask = Mask::new(self.mask_limits()).map_err(analysis)?;
        let freqs = self.monte_carlo_grid()?;
        let gain = trace(netlist, &freqs, false).map_err(analysis)?.gain_db;
        let roots = active::natural_frequencies(netlist).map_err(|cause| DesignError::Active {
            file: self.spec.file.clone(),
            cause,
        })?;
        let resonances_hz = mask.resonance_points(&roots, [freqs[0], freqs[freqs.len() - 1]]);
        mask.refined_verdict(&freqs, &gain, &resonances_hz, f64::INFINITY, |zoom| {
            trace(netlist, zoom, false).map(|t| t.gain_db)
        })
        .map_err(analysis)
    }

    /// The Monte Carlo boards of `active`: the design file's count, or
    /// [`default_trials`] of its active on parts build.
    pub fn trials(&self, active: &ActiveDesign) -> usize {
        self.spec
            .montecarlo
            .trials
            .unwrap_or_else(|| default_trials(opamps(active)))
    }

    /// The op-amp count of `active`'s build when the design file gives no
    /// trial count and the default was shortened for it.
    pub fn trials_shortened_for(&self, active: &ActiveDesign) -> Option<usize> {
        let n = opamps(active);
        (self.spec.montecarlo.trials.is_none() && default_trials(n) < DEFAULT_TRIALS).then_some(n)
    }

    /// Every analysis the documents need, on the active on parts build
    /// (what is soldered), with the design file's Monte Carlo run;
    /// `progress` is told how many of its trials are done.
    pub fn analyses(
        &self,
        active: &ActiveDesign,
        progress: Option<&(dyn Fn(usize) + Sync)>,
    ) -> Result<Analyses, DesignError> {
        let mc = &self.spec.montecarlo;
        let parts = &active.on_parts.netlist;
        Ok(Analyses {
            traces: self.chart_traces(active)?,
            sensitivity: self.sensitivity(parts)?,
            montecarlo: self.monte_carlo(active, true, self.trials(active), mc.seed, progress)?,
            before_tuning: match active.on_parts.has_readings() {
                true => {
                    Some(self.monte_carlo(active, false, self.trials(active), mc.seed, progress)?)
                }
                false => None,
            },
            payoffs: self.tolerance_payoffs(active, self.trials(active), mc.seed, progress)?,
            active_exact_verdict: self.verdict(&active.build.netlist)?,
            active_on_parts_verdict: self.verdict(parts)?,
            delay: self.delay_figures(active)?,
            noise: self.noise_figures(active)?,
            step: self.step_report(active)?,
        })
    }
}

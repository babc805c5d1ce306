//! Monte Carlo yield: draw every toleranced part and op-amp
//! gain-bandwidth, sweep, and check each trial against a mask.
//!
//! Reproducibility: trial t draws from ChaCha8 keyed by the seed, on
//! stream t (ChaCha8 gives 2^64 independent streams per key), and its
//! parts in element order; nothing else reaches its values. Each trial is
//! solved from the nominal system with every varied element refilled, and
//! AcSystem's refills give bit for bit the matrix a fresh build would
//! give, so a trial's result does not depend on which thread ran it or on
//! what that thread solved before: the result is identical for any rayon
//! thread count.
//!
//! Cost: each rayon job (a run of consecutive trials; a few per thread)
//! clones the system once, not once per trial, and a trial allocates
//! nothing: it refills values, solves into the system's
//! own buffers and writes its dB row into one table allocated up front.
//! Each job also clones one [`SparseAc`] built from the nominal system over
//! the analysis band (pivot order chosen once), refilled per trial from
//! the job's system: a few hundred nanoseconds per point instead of the
//! dense solve's tens of microseconds. Its result depends only on the
//! trial's values (the same order on every thread), so reproducibility
//! holds; a grid the sparse solver cannot take (one reaching 0 Hz) is
//! swept by AcSystem alone.

use std::sync::atomic::{AtomicUsize, Ordering};

use rand_chacha::rand_core::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use super::mask::{margin_db, Check, Mask};
use super::{AnalysisError, Parameter};
use crate::circuit::{AcSystem, CircuitError, Element, ElementKind, Netlist, OpAmpModel, SparseAc};
use crate::parts::Tolerance;

/// Which parts a tolerance rule applies to.
#[derive(Debug, Clone, PartialEq)]
pub enum Scope {
    /// Every resistor.
    Resistors,
    /// Every capacitor.
    Capacitors,
    /// Every inductor.
    Inductors,
    /// The gain-bandwidth of every single-pole or two-pole op-amp (ideal
    /// op-amps have none and are left alone).
    OpAmpGbw,
    /// One element by name (ignoring case): the value of an R, C or L, or
    /// the gain-bandwidth of a single-pole or two-pole op-amp.
    Element(String),
}

/// A tolerance for the parts in a scope. In a list of rules the last one
/// that applies to an element wins, so general rules go first and
/// exceptions after them.
#[derive(Debug, Clone, PartialEq)]
pub struct ToleranceRule {
    /// Which parts.
    pub scope: Scope,
    /// Their tolerance.
    pub tolerance: Tolerance,
}

/// Whether a drawn board is stable: true when it is. The analysis stage
/// sees only circuits, so the stage that owns the verdict passes it in.
pub type StabilityJudge<'a> = &'a (dyn Fn(&Netlist) -> bool + Sync);

/// A Monte Carlo run: what to sweep, what to vary, what must hold.
#[derive(Clone, Copy)]
pub struct MonteCarlo<'a> {
    /// Output node of H = V(out)/V(inp).
    pub out: usize,
    /// Input node.
    pub inp: usize,
    /// Analysis frequencies, Hz.
    pub freqs_hz: &'a [f64],
    /// The tolerances (later rules override earlier ones).
    pub rules: &'a [ToleranceRule],
    /// The limits every trial must keep.
    pub mask: &'a Mask,
    /// Number of trials, at least 1.
    pub trials: usize,
    /// The seed: one seed gives one result.
    pub seed: u64,
    /// How many of the worst trials to report.
    pub worst: usize,
    /// Judges every trial's stability, when given; an unstable trial
    /// fails whatever its response (a sweep of an unstable circuit is the
    /// steady state it never reaches).
    pub stability: Option<StabilityJudge<'a>>,
}

/// One varied quantity, as resolved from the rules.
#[derive(Debug, Clone, PartialEq)]
pub struct Varied {
    /// Element index in the netlist.
    pub element: usize,
    /// Element name.
    pub name: String,
    /// Which of its quantities.
    pub parameter: Parameter,
    /// Its nominal value (ohm, farad, henry, or Hz of gain-bandwidth).
    pub nominal: f64,
    /// Its tolerance.
    pub tolerance: Tolerance,
}

/// How one trial went.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TrialSummary {
    /// Trial index (0-based).
    pub trial: usize,
    /// Whether it kept every limit of the mask and was stable.
    pub passed: bool,
    /// Whether it was stable (true when no judge was given).
    pub stable: bool,
    /// The smallest distance to a limit, dB (negative: broken by that
    /// much).
    pub margin_db: f64,
    /// The largest |dB - nominal dB| over the frequencies.
    pub max_deviation_db: f64,
}

/// Min, median and max of 20 log10 |H| over the trials, per frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct Envelope {
    /// Lowest, dB.
    pub min_db: Vec<f64>,
    /// Median, dB (the mean of the two middle trials for an even count).
    pub median_db: Vec<f64>,
    /// Highest, dB.
    pub max_db: Vec<f64>,
}

/// The outcome of a Monte Carlo run.
#[derive(Debug, Clone, PartialEq)]
pub struct MonteCarloResult {
    /// The analysis frequencies, Hz.
    pub freq_hz: Vec<f64>,
    /// The nominal response, dB.
    pub nominal_db: Vec<f64>,
    /// What was varied, in element order.
    pub varied: Vec<Varied>,
    /// Trials that kept the mask and were stable.
    pub passed: usize,
    /// Trials judged unstable (each also counted as failed).
    pub unstable: usize,
    /// passed / trials.
    pub yield_fraction: f64,
    /// The envelope of the trials.
    pub envelope: Envelope,
    /// The worst trials, smallest margin first (ties by trial index).
    pub worst: Vec<TrialSummary>,
    /// Every trial, by index.
    pub per_trial: Vec<TrialSummary>,
}

/// How to write a drawn value back into the system.
#[derive(Debug, Clone, Copy)]
enum Setter {
    /// `set_value` (R, C, L).
    Value,
    /// This op-amp model at the gain-bandwidth drawn
    /// ([`OpAmpModel::with_gbw`]: a second pole moves with it, so the
    /// phase margin stays; see there why).
    Gbw(OpAmpModel),
}

/// A varied quantity ready to refill.
#[derive(Debug, Clone, Copy)]
struct Knob {
    element: usize,
    setter: Setter,
    nominal: f64,
    tolerance: Tolerance,
}

impl Knob {
    /// Writes `value` into the system.
    fn set(&self, system: &mut AcSystem, value: f64) -> Result<(), CircuitError> {
        match self.setter {
            Setter::Value => system.set_value(self.element, value),
            Setter::Gbw(model) => system.set_opamp_model(self.element, model.with_gbw(value)),
        }
    }
}

/// Whether a rule's scope takes in this element.
fn applies(scope: &Scope, element: &Element) -> bool {
    match scope {
        Scope::Resistors => element.kind() == ElementKind::Resistor,
        Scope::Capacitors => element.kind() == ElementKind::Capacitor,
        Scope::Inductors => element.kind() == ElementKind::Inductor,
        Scope::OpAmpGbw => matches!(
            element,
            Element::OpAmp { model, .. } if model.gbw_hz().is_some()
        ),
        Scope::Element(name) => element.name().eq_ignore_ascii_case(name),
    }
}

/// The quantity of an element that can vary, or the error for a rule
/// naming one that has none.
fn knob_of(index: usize, element: &Element, tolerance: Tolerance) -> Result<Knob, AnalysisError> {
    let not_variable = |kind| AnalysisError::NotVariable {
        name: element.name().to_string(),
        kind,
    };
    let (setter, nominal) = match *element {
        Element::Resistor { ohm: v, .. }
        | Element::Capacitor { farad: v, .. }
        | Element::Inductor { henry: v, .. } => (Setter::Value, v),
        Element::OpAmp { model, .. } => match model.gbw_hz() {
            Some(gbw_hz) => (Setter::Gbw(model), gbw_hz),
            None => return Err(not_variable("ideal op-amp")),
        },
        Element::VoltageSource { .. } => return Err(not_variable(element.kind().word())),
    };
    Ok(Knob {
        element: index,
        setter,
        nominal,
        tolerance,
    })
}

/// Resolves the rules against the netlist: one knob per varied element,
/// in element order.
fn knobs(system: &AcSystem, rules: &[ToleranceRule]) -> Result<Vec<Knob>, AnalysisError> {
    let elements = &system.netlist().elements;
    for rule in rules {
        if let Scope::Element(name) = &rule.scope {
            if !elements.iter().any(|e| e.name().eq_ignore_ascii_case(name)) {
                return Err(AnalysisError::UnknownElement { name: name.clone() });
            }
        }
    }
    let mut out = Vec::new();
    for (index, element) in elements.iter().enumerate() {
        if let Some(rule) = rules.iter().rev().find(|r| applies(&r.scope, element)) {
            out.push(knob_of(index, element, rule.tolerance)?);
        }
    }
    Ok(out)
}

/// 20 log10 |H|.
fn db(h: num_complex::Complex64) -> f64 {
    20.0 * h.norm().log10()
}

/// The generator of one trial: the seed is the ChaCha key (any key gives
/// output indistinguishable from random, so no mixing is needed) and the
/// trial index the stream.
fn trial_rng(seed: u64, trial: usize) -> ChaCha8Rng {
    let mut key = [0u8; 32];
    key[..8].copy_from_slice(&seed.to_le_bytes());
    let mut rng = ChaCha8Rng::from_seed(key);
    rng.set_stream(trial as u64);
    rng
}

/// What every trial shares.
struct Run<'a> {
    setup: &'a MonteCarlo<'a>,
    knobs: &'a [Knob],
    checks: &'a [Check],
    nominal_db: &'a [f64],
}

impl Run<'_> {
    /// Draws, refills and sweeps trial `trial` into `row` (dB), and
    /// judges it.
    fn trial(
        &self,
        worker: &mut Worker,
        trial: usize,
        row: &mut [f64],
    ) -> Result<TrialSummary, CircuitError> {
        let mut rng = trial_rng(self.setup.seed, trial);
        for knob in self.knobs {
            knob.set(
                &mut worker.system,
                knob.nominal * knob.tolerance.draw(&mut rng),
            )?;
        }
        worker.sweep(self.setup)?;
        for (slot, &h) in row.iter_mut().zip(&worker.h) {
            *slot = db(h);
        }
        let margin_db = margin_db(self.checks, row);
        let stable = self
            .setup
            .stability
            .is_none_or(|judge| judge(worker.system.netlist()));
        let max_deviation_db = row
            .iter()
            .zip(self.nominal_db)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        Ok(TrialSummary {
            trial,
            passed: margin_db >= 0.0 && stable,
            stable,
            margin_db,
            max_deviation_db,
        })
    }
}

/// One rayon job's own copies: the system it refills, the sparse solver
/// (if the grid allows one), and the transfer of the last trial.
#[derive(Clone)]
struct Worker {
    system: AcSystem,
    sparse: Option<SparseAc>,
    h: Vec<num_complex::Complex64>,
}

impl Worker {
    /// Sweeps the system's current values into `h`.
    fn sweep(&mut self, setup: &MonteCarlo<'_>) -> Result<(), CircuitError> {
        // A copy of the nominal system keeps its topology, so the refill
        // cannot fail; should it, the dense path sweeps.
        let refilled = match self.sparse.as_mut() {
            Some(sparse) => sparse.refill(&self.system).is_ok(),
            None => false,
        };
        match self.sparse.as_mut() {
            Some(sparse) if refilled => {
                sparse.sweep_into(setup.freqs_hz, setup.out, setup.inp, &mut self.h)
            }
            _ => {
                self.h.clear();
                for &f in setup.freqs_hz {
                    let h = self.system.transfer(f, setup.out, setup.inp)?;
                    self.h.push(h);
                }
                Ok(())
            }
        }
    }
}

/// Runs a Monte Carlo analysis on the current values of `system` (left
/// unchanged), in parallel on the current rayon pool. `progress`, if
/// given, is called once per finished trial with the number finished so
/// far; calls come from the worker threads, possibly out of order.
pub fn monte_carlo(
    system: &AcSystem,
    setup: &MonteCarlo<'_>,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> Result<MonteCarloResult, AnalysisError> {
    let n = setup.freqs_hz.len();
    if n == 0 {
        return Err(AnalysisError::EmptyGrid {
            what: "Monte Carlo frequency",
        });
    }
    if setup.trials == 0 {
        return Err(AnalysisError::NoTrials);
    }
    let checks = setup.mask.checks(setup.freqs_hz)?;
    let knobs = knobs(system, setup.rules)?;
    let (lo, hi) = setup
        .freqs_hz
        .iter()
        .fold((f64::INFINITY, 0.0_f64), |(lo, hi), &f| {
            (lo.min(f), hi.max(f))
        });
    let worker = Worker {
        system: system.clone(),
        sparse: SparseAc::new(system, lo, hi).ok(),
        h: Vec::with_capacity(n),
    };
    // The nominal response by the trials' own solver, so a trial with
    // every value at nominal reproduces it bit for bit.
    let mut nominal = worker.clone();
    nominal.sweep(setup)?;
    let nominal_db: Vec<f64> = nominal.h.iter().map(|&h| db(h)).collect();
    let run = Run {
        setup,
        knobs: &knobs,
        checks: &checks,
        nominal_db: &nominal_db,
    };
    let done = AtomicUsize::new(0);
    let mut table = vec![0.0; setup.trials * n];
    let outcomes: Vec<Result<TrialSummary, CircuitError>> = table
        .par_chunks_mut(n)
        .enumerate()
        .map_init(
            || worker.clone(),
            |own, (trial, row)| {
                let outcome = run.trial(own, trial, row);
                if let Some(report) = progress {
                    report(done.fetch_add(1, Ordering::Relaxed) + 1);
                }
                outcome
            },
        )
        .collect();
    let per_trial = outcomes
        .into_iter()
        .enumerate()
        .map(|(trial, o)| o.map_err(|source| AnalysisError::Trial { trial, source }))
        .collect::<Result<Vec<_>, _>>()?;
    let passed = per_trial.iter().filter(|t| t.passed).count();
    let unstable = per_trial.iter().filter(|t| !t.stable).count();
    Ok(MonteCarloResult {
        freq_hz: setup.freqs_hz.to_vec(),
        envelope: envelope(&table, setup.trials, n),
        nominal_db,
        varied: knobs.iter().map(|k| varied(system, k)).collect(),
        passed,
        unstable,
        yield_fraction: passed as f64 / setup.trials as f64,
        worst: worst(&per_trial, setup.worst),
        per_trial,
    })
}

/// The public description of a knob.
fn varied(system: &AcSystem, knob: &Knob) -> Varied {
    Varied {
        element: knob.element,
        name: system.netlist().elements[knob.element].name().to_string(),
        parameter: match knob.setter {
            Setter::Value => Parameter::Value,
            Setter::Gbw(_) => Parameter::GainBandwidth,
        },
        nominal: knob.nominal,
        tolerance: knob.tolerance,
    }
}

/// The `count` trials with the smallest margin, ties by index.
fn worst(per_trial: &[TrialSummary], count: usize) -> Vec<TrialSummary> {
    let mut sorted = per_trial.to_vec();
    sorted.sort_by(|a, b| {
        a.margin_db
            .total_cmp(&b.margin_db)
            .then(a.trial.cmp(&b.trial))
    });
    sorted.truncate(count);
    sorted
}

/// Min, median and max of each column of a trials x n row-major table,
/// the columns in parallel (each one's result depends on its data alone).
fn envelope(table: &[f64], trials: usize, n: usize) -> Envelope {
    let columns: Vec<(f64, f64, f64)> = (0..n)
        .into_par_iter()
        .map_init(
            || vec![0.0; trials],
            |column, j| {
                for (c, row) in column.iter_mut().zip(table.chunks_exact(n)) {
                    *c = row[j];
                }
                column_stats(column)
            },
        )
        .collect();
    Envelope {
        min_db: columns.iter().map(|c| c.0).collect(),
        median_db: columns.iter().map(|c| c.1).collect(),
        max_db: columns.iter().map(|c| c.2).collect(),
    }
}

/// (min, median, max) of a non-empty column, reordering it.
fn column_stats(column: &mut [f64]) -> (f64, f64, f64) {
    let even = column.len() % 2 == 0;
    let (lower, &mut upper_mid, upper) =
        column.select_nth_unstable_by(column.len() / 2, f64::total_cmp);
    let median = if even {
        // The lower middle is the largest of the lower half.
        let lower_mid = lower.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        (lower_mid + upper_mid) / 2.0
    } else {
        upper_mid
    };
    let min = lower.iter().copied().fold(upper_mid, f64::min);
    let max = upper.iter().copied().fold(upper_mid, f64::max);
    (min, median, max)
}

#[cfg(test)]
mod tests {
    use super::column_stats;

    /// The textbook median of a sorted copy: the middle value, or the
    /// mean of the two middle values for an even count.
    fn sorted_median(values: &[f64]) -> f64 {
        let mut v = values.to_vec();
        v.sort_by(f64::total_cmp);
        let m = v.len() / 2;
        if v.len() % 2 == 0 {
            (v[m - 1] + v[m]) / 2.0
        } else {
            v[m]
        }
    }

    #[test]
    fn column_stats_match_a_sort_for_odd_and_even_counts() {
        for len in 1..=9 {
            // A scrambled, repeating sequence: 7 is coprime to 11.
            let values: Vec<f64> = (0..len).map(|i| ((i * 7) % 11) as f64 - 4.5).collect();
            let mut column = values.clone();
            let (min, median, max) = column_stats(&mut column);
            let lowest = values.iter().copied().fold(f64::INFINITY, f64::min);
            let highest = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            assert_eq!(
                (min, median, max),
                (lowest, sorted_median(&values), highest)
            );
        }
    }
}

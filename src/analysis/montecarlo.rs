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
//! Cost: each rayon job (a run of consecutive trials; a few per thread
//! and block) clones the system once, not once per trial, and a trial
//! allocates nothing: it refills values, solves into the system's own
//! buffers and writes its dB row into one block table allocated up front.
//! Each job also clones one [`SparseAc`] built from the nominal system over
//! the analysis band (pivot order chosen once), and one over the delay
//! limit's band when the run has one, each refilled per trial from
//! the job's system: a few hundred nanoseconds per point instead of the
//! dense solve's tens of microseconds. Its result depends only on the
//! trial's values (the same order on every thread), so reproducibility
//! holds; a grid the sparse solver cannot take (one reaching 0 Hz) is
//! swept by AcSystem alone.
//!
//! Memory: the trials run in blocks of [`BLOCK_TRIALS`], each solved in
//! parallel into the block table and then folded, in trial order, into
//! the counts, the worst trials (a heap of at most `worst`) and the
//! envelope, so a run holds one block table (BLOCK_TRIALS x points) and
//! one histogram per frequency ([`MEDIAN_BINS`]) whatever its trial
//! count. A run of at most one block has its exact median; a longer one a
//! binned median within a stated bound (see [`Envelope::median_db`]).

use std::cmp::Ordering as Order;
use std::collections::BinaryHeap;
use std::sync::atomic::{AtomicUsize, Ordering};

use rand_chacha::rand_core::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;

use super::mask::{Check, Mask, MaskVerdict, REFINE_BAND_DB};
use super::spread::{DelayLimit, DelayVerdict};
use super::{AnalysisError, Parameter, Tuning};
use crate::circuit::{AcSystem, CircuitError, Element, ElementKind, Netlist, OpAmpModel, SparseAc};
use crate::parts::Tolerance;
use num_complex::Complex64;

/// Trials per block: the block's trials are solved in parallel into one
/// table of BLOCK_TRIALS x points dB values (6.5 MB on a design's 200
/// points), then folded in trial order, so a run's memory does not grow
/// with its trial count. Large enough that a block keeps every thread busy
/// for many trials (the clone per rayon job and the wait at the block's
/// end are a small part of it), that the range of the median's histogram
/// is set from thousands of trials, and that a run of the default 1000
/// trials (and any up to this size) has its exact median.
pub const BLOCK_TRIALS: usize = 4096;

/// Bins of the histogram per frequency from which a run longer than one
/// block estimates its median (see [`Envelope::median_db`]). The bound
/// on the estimate's error is one bin width, the first block's spread
/// over MEDIAN_BINS. For a response spread normally with standard
/// deviation sigma, that spread is about 7.3 sigma (the expected range of
/// 4096 normal draws, twice the expected largest, 3.63, by numerical
/// integration), so the bound is about 8.9e-4 sigma: below the median's
/// own sampling error, 1.2533 sigma / sqrt(trials) (common practice), up
/// to 2 million trials, and 2.2 times it at 10 million (the most a design
/// file may ask for); the interpolation within the bin usually does much
/// better than the bound. Its counts take 64 KB per frequency.
pub const MEDIAN_BINS: usize = 8192;

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

/// What a drawn board's natural frequencies say. The analysis stage sees
/// only circuits, so the stage that owns the roots passes a judge in.
#[derive(Debug, Clone, PartialEq)]
pub struct BoardRoots {
    /// Whether the board is stable.
    pub stable: bool,
    /// Its natural frequencies, rad/s: a narrow peak or dip lies at a
    /// resonance ([`Mask::resonance_points`]), so the board is judged
    /// there too.
    pub roots_rad_s: Vec<Complex64>,
}

/// The natural frequencies of a drawn board (see [`BoardRoots`]).
pub type BoardJudge<'a> = &'a (dyn Fn(&Netlist) -> BoardRoots + Sync);

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
    /// Finds every trial's natural frequencies, when given: an unstable
    /// trial fails whatever its response (a sweep of an unstable circuit
    /// is the steady state it never reaches), and every trial is also
    /// judged at its resonances within the mask.
    pub roots: Option<BoardJudge<'a>>,
    /// A bound on the group-delay spread every trial must also keep, when
    /// the specification has one (exact delay on the limit's own grid).
    pub delay: Option<&'a DelayLimit>,
    /// How every board's trimmers are set, when the build has any: left
    /// at their nominal settings or tuned by the procedure.
    pub tuning: Option<&'a Tuning>,
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
    /// Where that limit is closest, Hz.
    pub at_hz: f64,
    /// The trial's gain there, dB.
    pub gain_db: f64,
    /// The limit, dB.
    pub limit_db: f64,
    /// Whether the limit is a lower one (a passband limit) rather than an
    /// upper one (a stopband limit).
    pub lower_bound: bool,
    /// The largest |dB - nominal dB| over the frequencies.
    pub max_deviation_db: f64,
    /// The group-delay spread, seconds, when the run has a delay limit.
    pub delay_spread_s: Option<f64>,
    /// Whether that spread kept the limit (true without one).
    pub delay_ok: bool,
}

/// Min, median and max of 20 log10 |H| over the trials, per frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct Envelope {
    /// Lowest, dB (exact).
    pub min_db: Vec<f64>,
    /// Median, dB: the middle trial, or the mean of the two middle trials
    /// for an even count.
    ///
    /// Exact for a run of at most [`BLOCK_TRIALS`] trials. A longer run
    /// counts each frequency's values in a histogram of [`MEDIAN_BINS`]
    /// equal bins spanning the first block's lowest to highest finite value
    /// (lo to hi), with one count below lo and one above hi, and takes
    /// each middle trial of rank r (0-based) from the bin its rank falls
    /// in, by linear interpolation of the rank within the bin: the bin's
    /// lower edge plus (r - trials before the bin + 1/2) / (trials in the
    /// bin) of its width. The binning is monotone in the value (a
    /// subtraction and a multiplication by a positive constant, each
    /// rounded monotonically), so the trial of rank r lies in that same
    /// bin: the error is at most one bin width, (hi - lo) / MEDIAN_BINS
    /// (plus the rounding of the bin edges, a few units in the last place
    /// of lo and hi). Should a middle rank fall below lo or above hi (half
    /// the trials beyond the first block's extremes, which trials drawn
    /// alike practically never give), the same interpolation runs over
    /// the interval from the exact minimum to lo (or hi to the exact
    /// maximum), and the bound is that interval's width (when that
    /// extreme is infinite, the estimate is the extreme). The estimate
    /// depends only on the trials' values, so it too is the same for any
    /// thread count.
    pub median_db: Vec<f64>,
    /// Highest, dB (exact).
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
    /// Trials whose group-delay spread broke the delay limit (each also
    /// counted as failed; 0 without a limit).
    pub delay_failed: usize,
    /// passed / trials.
    pub yield_fraction: f64,
    /// The envelope of the trials.
    pub envelope: Envelope,
    /// The worst trials, smallest margin first (ties by trial index).
    pub worst: Vec<TrialSummary>,
    /// How many trials ran.
    pub trials: usize,
}

/// The two-sided 95 % normal quantile (common practice).
pub const Z95: f64 = 1.959_963_984_540_054;

/// Wilson's score interval for a proportion of `passed` in `trials`
/// (E. B. Wilson, "Probable inference, the law of succession, and
/// statistical inference", J. Amer. Statist. Assoc. 1927), with normal
/// quantile `z`: well behaved near 0 and 1, where a yield often is
/// (R. G. Newcombe, "Two-sided confidence intervals for the single
/// proportion: comparison of seven methods", Statistics in Medicine
/// 1998). `(0, 1)` for no trials.
pub fn wilson_interval(passed: usize, trials: usize, z: f64) -> (f64, f64) {
    if trials == 0 {
        return (0.0, 1.0);
    }
    let n = trials as f64;
    let p = passed as f64 / n;
    let z2 = z * z;
    let scale = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / scale;
    let half = z * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt() / scale;
    ((centre - half).max(0.0), (centre + half).min(1.0))
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
    /// The delay limit's grid (empty without one).
    delay_grid: &'a [f64],
}

impl Run<'_> {
    /// Draws, refills and sweeps trial `trial` into `row` (dB), and
    /// judges it.
    fn trial(
        &self,
        worker: &mut Worker,
        trial: usize,
        row: &mut [f64],
    ) -> Result<TrialSummary, AnalysisError> {
        let mut rng = trial_rng(self.setup.seed, trial);
        for knob in self.knobs {
            knob.set(
                &mut worker.system,
                knob.nominal * knob.tolerance.draw(&mut rng),
            )?;
        }
        if let Some(tuning) = self.setup.tuning {
            tuning.apply(&mut worker.system)?;
        }
        worker.sweep(self.setup)?;
        for (slot, &h) in row.iter_mut().zip(&worker.h) {
            *slot = db(h);
        }
        let roots = self.setup.roots.map(|judge| judge(worker.system.netlist()));
        let stable = roots.as_ref().is_none_or(|r| r.stable);
        let freqs = self.setup.freqs_hz;
        let resonances_hz = roots
            .map(|r| {
                let span = [freqs[0], freqs[freqs.len() - 1]];
                self.setup.mask.resonance_points(&r.roots_rad_s, span)
            })
            .unwrap_or_default();
        // A board is judged as the verdicts are, at its resonances and
        // refined around every ripple peak that may come within
        // REFINE_BAND_DB of a limit, so neither its pass nor its margin
        // depends on where the grid's points fell. Every limit is sampled
        // and has a finite bound (Mask::checks, Mask::new), so a board
        // always has a closest one.
        let v = self.setup.mask.refined_verdict_on(
            self.checks,
            freqs,
            row,
            &resonances_hz,
            REFINE_BAND_DB,
            |zoom| worker.gains_db(self.setup, zoom),
        )?;
        let MaskVerdict {
            margin_db,
            at_hz,
            gain_db,
            limit_db,
            lower_bound,
            ..
        } = v;
        let delay = match self.setup.delay {
            Some(limit) => Some(worker.delay_verdict(self.setup, limit, self.delay_grid)?),
            None => None,
        };
        let delay_spread_s = delay.map(|v| v.spread_s);
        let delay_ok = delay.is_none_or(|v| v.meets);
        let max_deviation_db = row
            .iter()
            .zip(self.nominal_db)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        Ok(TrialSummary {
            trial,
            passed: margin_db >= 0.0 && stable && delay_ok,
            stable,
            margin_db,
            at_hz,
            gain_db,
            limit_db,
            lower_bound,
            max_deviation_db,
            delay_spread_s,
            delay_ok,
        })
    }
}

/// One rayon job's own copies: the system it refills, the sparse solver
/// (if the grid allows one), and the transfer of the last trial.
#[derive(Clone)]
struct Worker {
    system: AcSystem,
    sparse: Option<SparseAc>,
    /// The sparse solver over the delay limit's band, apart from the
    /// analysis band's: one pivot order over both failed its guard below
    /// a few hertz on a delay band from DC (a 7th-order bandstop at 1 Hz
    /// took 16 ms per board in the dense fallback, 2.5 ms so).
    delay_sparse: Option<SparseAc>,
    h: Vec<num_complex::Complex64>,
    /// Whether `sparse` holds the current board (its refill succeeded).
    sparse_current: bool,
    /// The delay grid's transfer and delay (unused without a limit).
    hd: Vec<num_complex::Complex64>,
    delay_s: Vec<f64>,
}

impl Worker {
    /// The gain, dB, of the board the system holds (after
    /// [`Worker::sweep`]) at `freqs_hz` within the grid's span.
    fn gains_db(
        &mut self,
        setup: &MonteCarlo<'_>,
        freqs_hz: &[f64],
    ) -> Result<Vec<f64>, AnalysisError> {
        let mut h = Vec::with_capacity(freqs_hz.len());
        self.transfers_into(setup, freqs_hz, &mut h)?;
        Ok(h.into_iter().map(db).collect())
    }

    /// Sweeps the system's current values into `h`.
    fn sweep(&mut self, setup: &MonteCarlo<'_>) -> Result<(), CircuitError> {
        // A copy of the nominal system keeps its topology, so the refill
        // cannot fail; should it, the dense path sweeps.
        self.sparse_current = match self.sparse.as_mut() {
            Some(sparse) => sparse.refill(&self.system).is_ok(),
            None => false,
        };
        let mut h = std::mem::take(&mut self.h);
        let swept = self.transfers_into(setup, setup.freqs_hz, &mut h);
        self.h = h;
        swept
    }

    /// The transfer of the board the system holds at `freqs_hz` into `h`
    /// (cleared first): by the sparse solver when it holds the board, else
    /// by the dense one.
    fn transfers_into(
        &mut self,
        setup: &MonteCarlo<'_>,
        freqs_hz: &[f64],
        h: &mut Vec<Complex64>,
    ) -> Result<(), CircuitError> {
        match self.sparse.as_mut() {
            Some(sparse) if self.sparse_current => {
                sparse.sweep_into(freqs_hz, setup.out, setup.inp, h)
            }
            _ => {
                h.clear();
                for &f in freqs_hz {
                    h.push(self.system.transfer(f, setup.out, setup.inp)?);
                }
                Ok(())
            }
        }
    }

    /// How the delay over `grid` (the limit's) of the system's current
    /// values stands against `limit`.
    fn delay_verdict(
        &mut self,
        setup: &MonteCarlo<'_>,
        limit: &DelayLimit,
        grid: &[f64],
    ) -> Result<DelayVerdict, CircuitError> {
        let refilled = match self.delay_sparse.as_mut() {
            Some(sparse) => sparse.refill(&self.system).is_ok(),
            None => false,
        };
        match self.delay_sparse.as_mut() {
            Some(sparse) if refilled => sparse.sweep_delay_into(
                grid,
                setup.out,
                setup.inp,
                &mut self.hd,
                &mut self.delay_s,
            )?,
            _ => {
                self.delay_s.clear();
                for &f in grid {
                    let d = self.system.group_delay(f, setup.out, setup.inp)?;
                    self.delay_s.push(d);
                }
            }
        }
        Ok(limit.verdict(grid, &self.delay_s))
    }
}

/// Runs a Monte Carlo analysis on the current values of `system` (left
/// unchanged), in parallel on the current rayon pool, in blocks of
/// [`BLOCK_TRIALS`]. `progress`, if given, is called once per finished
/// trial with the number finished so far; calls come from the worker
/// threads, possibly out of order.
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
    let delay_grid = setup.delay.map(DelayLimit::grid).unwrap_or_default();
    let over = |grid: &[f64]| {
        let (lo, hi) = grid.iter().fold((f64::INFINITY, 0.0_f64), |(lo, hi), &f| {
            (lo.min(f), hi.max(f))
        });
        SparseAc::new(system, lo, hi).ok()
    };
    let worker = Worker {
        system: system.clone(),
        sparse: over(setup.freqs_hz),
        delay_sparse: match delay_grid.is_empty() {
            true => None,
            false => over(&delay_grid),
        },
        h: Vec::with_capacity(n),
        sparse_current: false,
        hd: Vec::with_capacity(delay_grid.len()),
        delay_s: Vec::with_capacity(delay_grid.len()),
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
        delay_grid: &delay_grid,
    };
    let done = AtomicUsize::new(0);
    let block = setup.trials.min(BLOCK_TRIALS);
    let mut table = vec![0.0; block * n];
    let mut outcomes = Vec::with_capacity(block);
    let mut tally = Tally::new(setup.worst);
    let mut streamed: Option<StreamedEnvelope> = None;
    for first in (0..setup.trials).step_by(BLOCK_TRIALS) {
        let rows = &mut table[..(setup.trials - first).min(BLOCK_TRIALS) * n];
        rows.par_chunks_mut(n)
            .enumerate()
            .map_init(
                || worker.clone(),
                |own, (i, row)| {
                    let outcome = run.trial(own, first + i, row);
                    if let Some(report) = progress {
                        report(done.fetch_add(1, Ordering::Relaxed) + 1);
                    }
                    outcome
                },
            )
            .collect_into_vec(&mut outcomes);
        // In trial order: the first trial that failed is the lowest.
        for (i, outcome) in outcomes.drain(..).enumerate() {
            let summary = outcome.map_err(|e| match e {
                AnalysisError::Circuit(source) => AnalysisError::Trial {
                    trial: first + i,
                    source,
                },
                other => other,
            })?;
            tally.add(summary);
        }
        if setup.trials > BLOCK_TRIALS {
            streamed
                .get_or_insert_with(|| StreamedEnvelope::new(rows, n))
                .add(rows, n);
        }
    }
    let envelope = match streamed {
        Some(streamed) => streamed.envelope(setup.trials),
        // A run of one block: the table holds every trial.
        None => envelope(&table, setup.trials, n),
    };
    Ok(MonteCarloResult {
        freq_hz: setup.freqs_hz.to_vec(),
        envelope,
        nominal_db,
        varied: knobs.iter().map(|k| varied(system, k)).collect(),
        passed: tally.passed,
        unstable: tally.unstable,
        delay_failed: tally.delay_failed,
        yield_fraction: tally.passed as f64 / setup.trials as f64,
        worst: tally.worst.into_sorted(),
        trials: setup.trials,
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

/// The counts and the worst trials, folded one trial at a time.
struct Tally {
    passed: usize,
    unstable: usize,
    delay_failed: usize,
    worst: Worst,
}

impl Tally {
    fn new(worst: usize) -> Tally {
        Tally {
            passed: 0,
            unstable: 0,
            delay_failed: 0,
            worst: Worst::new(worst),
        }
    }

    fn add(&mut self, trial: TrialSummary) {
        self.passed += usize::from(trial.passed);
        self.unstable += usize::from(!trial.stable);
        self.delay_failed += usize::from(!trial.delay_ok);
        self.worst.add(trial);
    }
}

/// A trial ordered by margin, then by index: the order of the worst list
/// (a total order, as `f64::total_cmp` orders every margin).
#[derive(Debug, Clone, Copy)]
struct ByMargin(TrialSummary);

impl Ord for ByMargin {
    fn cmp(&self, other: &Self) -> Order {
        self.0
            .margin_db
            .total_cmp(&other.0.margin_db)
            .then(self.0.trial.cmp(&other.0.trial))
    }
}

impl PartialOrd for ByMargin {
    fn partial_cmp(&self, other: &Self) -> Option<Order> {
        Some(self.cmp(other))
    }
}

impl PartialEq for ByMargin {
    fn eq(&self, other: &Self) -> bool {
        self.cmp(other) == Order::Equal
    }
}

impl Eq for ByMargin {}

/// The `count` trials with the smallest margin (ties by index) among
/// those added: a max-heap whose top is the best of them, the one a worse
/// trial displaces. Its memory is `count` trials at most, whatever the
/// run's length, and each trial costs O(log count).
struct Worst {
    count: usize,
    heap: BinaryHeap<ByMargin>,
}

impl Worst {
    fn new(count: usize) -> Worst {
        Worst {
            count,
            heap: BinaryHeap::new(),
        }
    }

    fn add(&mut self, trial: TrialSummary) {
        let trial = ByMargin(trial);
        if self.heap.len() < self.count {
            self.heap.push(trial);
        } else if let Some(mut top) = self.heap.peek_mut() {
            if trial < *top {
                *top = trial;
            }
        }
    }

    /// Smallest margin first, ties by index: what a sort of every trial
    /// by (margin, index) would put first.
    fn into_sorted(self) -> Vec<TrialSummary> {
        self.heap
            .into_sorted_vec()
            .into_iter()
            .map(|t| t.0)
            .collect()
    }
}

/// The envelope of a run longer than one block, folded block by block:
/// per frequency the exact lowest and highest value and the histogram the
/// median is estimated from (see [`Envelope::median_db`]).
struct StreamedEnvelope {
    columns: Vec<ColumnTally>,
}

impl StreamedEnvelope {
    /// The histograms' ranges from the first block (a trials x n
    /// row-major table), nothing counted yet.
    fn new(first: &[f64], n: usize) -> StreamedEnvelope {
        let columns = (0..n)
            .into_par_iter()
            .map(|j| {
                let (lo, hi) = first
                    .chunks_exact(n)
                    .map(|row| row[j])
                    .filter(|v| v.is_finite())
                    .fold(None, |range: Option<(f64, f64)>, v| match range {
                        None => Some((v, v)),
                        Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
                    })
                    // No finite value: every value counts below or above.
                    .unwrap_or((0.0, 0.0));
                ColumnTally::new(lo, hi)
            })
            .collect();
        StreamedEnvelope { columns }
    }

    /// Folds a block (a trials x n row-major table), each frequency's
    /// values in trial order, the frequencies in parallel (each one's
    /// tally depends on its own values alone).
    fn add(&mut self, block: &[f64], n: usize) {
        self.columns
            .par_iter_mut()
            .enumerate()
            .for_each(|(j, column)| {
                for row in block.chunks_exact(n) {
                    column.add(row[j]);
                }
            });
    }

    /// The envelope of the `trials` values folded per frequency.
    fn envelope(&self, trials: usize) -> Envelope {
        Envelope {
            min_db: self.columns.iter().map(|c| c.min).collect(),
            median_db: self.columns.iter().map(|c| c.median(trials).0).collect(),
            max_db: self.columns.iter().map(|c| c.max).collect(),
        }
    }
}

/// One frequency's values of a long run: exact extremes and a histogram
/// of [`MEDIAN_BINS`] equal bins from `lo` to `hi`, with the values below
/// `lo` and above `hi` (and NaN) counted apart.
struct ColumnTally {
    min: f64,
    max: f64,
    lo: f64,
    hi: f64,
    /// Bins per dB: MEDIAN_BINS / (hi - lo), or 0 for an empty range
    /// (every value in it goes to the first bin).
    per_db: f64,
    below: u64,
    above: u64,
    bins: Vec<u64>,
}

impl ColumnTally {
    fn new(lo: f64, hi: f64) -> ColumnTally {
        let per_db = if hi > lo {
            MEDIAN_BINS as f64 / (hi - lo)
        } else {
            0.0
        };
        ColumnTally {
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
            lo,
            hi,
            per_db,
            below: 0,
            above: 0,
            bins: vec![0; MEDIAN_BINS],
        }
    }

    /// The bin of a value in [lo, hi]: monotone in the value (hi itself
    /// goes to the last bin).
    fn bin(&self, value: f64) -> usize {
        // `as` saturates, and an empty range's 0 x 0 is 0.
        (((value - self.lo) * self.per_db) as usize).min(MEDIAN_BINS - 1)
    }

    fn add(&mut self, value: f64) {
        // f64::min and max skip NaN, as the exact envelope's do.
        self.min = self.min.min(value);
        self.max = self.max.max(value);
        if value < self.lo {
            self.below += 1;
        } else if value <= self.hi {
            let bin = self.bin(value);
            self.bins[bin] += 1;
        } else {
            self.above += 1;
        }
    }

    /// The value of rank `rank` (0-based), interpolated within the bin it
    /// falls in, and that bin's width (the bound on the error).
    fn rank(&self, rank: u64) -> (f64, f64) {
        // Within an interval [a, b] holding `count` values of which
        // `before` rank lower: the rank's share of it, mid-value.
        let within = |from: f64, width: f64, before: u64, count: u64| {
            let share = ((rank - before) as f64 + 0.5) / count as f64;
            (from + width * share, width)
        };
        if rank < self.below {
            let below = within(self.min, self.lo - self.min, 0, self.below);
            return end_interval(self.min, self.lo, below);
        }
        let width = if self.per_db > 0.0 {
            (self.hi - self.lo) / MEDIAN_BINS as f64
        } else {
            0.0
        };
        let mut before = self.below;
        for (k, &count) in self.bins.iter().enumerate() {
            if rank < before + count {
                return within(self.lo + k as f64 * width, width, before, count);
            }
            before += count;
        }
        let above = within(self.hi, self.max - self.hi, before, self.above);
        end_interval(self.max, self.hi, above)
    }

    /// The median of the `trials` values folded (the mean of the two
    /// middle ones for an even count), estimated, and the bound on its
    /// error.
    fn median(&self, trials: usize) -> (f64, f64) {
        let middle = (trials / 2) as u64;
        let (upper, upper_bound) = self.rank(middle);
        if trials.is_multiple_of(2) {
            let (lower, lower_bound) = self.rank(middle - 1);
            ((lower + upper) / 2.0, lower_bound.max(upper_bound))
        } else {
            (upper, upper_bound)
        }
    }
}

/// An estimate inside the interval between an exact extreme and the
/// histogram's edge: when the extreme is infinite (or NaN), the extreme
/// itself, with an unbounded error.
fn end_interval(extreme: f64, edge: f64, estimate: (f64, f64)) -> (f64, f64) {
    if extreme.is_finite() && edge.is_finite() {
        estimate
    } else {
        (extreme, f64::INFINITY)
    }
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
    let even = column.len().is_multiple_of(2);
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
    use rand_chacha::rand_core::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    use super::{column_stats, StreamedEnvelope, TrialSummary, Worst, BLOCK_TRIALS, MEDIAN_BINS};

    /// The textbook median of a sorted copy: the middle value, or the
    /// mean of the two middle values for an even count.
    fn sorted_median(values: &[f64]) -> f64 {
        let mut v = values.to_vec();
        v.sort_by(f64::total_cmp);
        let m = v.len() / 2;
        if v.len().is_multiple_of(2) {
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

    /// A uniform draw in [0, 1) from the top 53 bits.
    fn unit(rng: &mut ChaCha8Rng) -> f64 {
        (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    /// Rounding of the bin edges beyond the bound of one bin width, in
    /// units of the larger of |lo| and |hi| (see `Envelope::median_db`).
    const BIN_EDGE_ROUNDING: f64 = 8.0 * f64::EPSILON;

    #[test]
    fn streamed_median_keeps_its_bound_against_the_exact_median() {
        // Columns a run's blocks could give, stored whole so a sort gives
        // the exact median: a skewed spread (cubes of uniform draws), a
        // spread whose later blocks drift above the first block's range
        // (so the middle falls in the count above hi and the bound is
        // that interval's), one value repeated (no spread: exact), and a
        // column with infinite gains below (a transmission zero hit).
        let trials = 3 * BLOCK_TRIALS + 501;
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let skewed: Vec<f64> = (0..trials)
            .map(|_| -20.0 * unit(&mut rng).powi(3))
            .collect();
        let drifting: Vec<f64> = (0..trials)
            .map(|t| unit(&mut rng) + if t < BLOCK_TRIALS { 0.0 } else { 3.0 })
            .collect();
        let flat = vec![-6.02; trials];
        let zeros: Vec<f64> = (0..trials)
            .map(|t| {
                if t % 7 == 0 {
                    f64::NEG_INFINITY
                } else {
                    -40.0 - unit(&mut rng)
                }
            })
            .collect();
        let columns = [skewed, drifting, flat, zeros];
        let n = columns.len();
        for trials in [trials, trials - 1] {
            let table: Vec<f64> = (0..trials)
                .flat_map(|t| columns.iter().map(move |c| c[t]))
                .collect();
            let mut streamed = None;
            for block in table.chunks(BLOCK_TRIALS * n) {
                streamed
                    .get_or_insert_with(|| StreamedEnvelope::new(block, n))
                    .add(block, n);
            }
            let streamed = streamed.unwrap();
            let envelope = streamed.envelope(trials);
            for (j, column) in columns.iter().enumerate() {
                let mut exact = column[..trials].to_vec();
                let (min, median, max) = column_stats(&mut exact);
                assert_eq!((envelope.min_db[j], envelope.max_db[j]), (min, max));
                let c = &streamed.columns[j];
                let (got, bound) = c.median(trials);
                assert_eq!(got, envelope.median_db[j]);
                let bin = (c.hi - c.lo) / MEDIAN_BINS as f64;
                let slack = BIN_EDGE_ROUNDING * c.lo.abs().max(c.hi.abs()).max(c.max.abs());
                match j {
                    // The middle inside the histogram: one bin.
                    0 | 3 => assert_eq!(bound, bin, "column {j}"),
                    // Above the first block's range: from hi to the max.
                    1 => assert_eq!(bound, c.max - c.hi),
                    _ => assert_eq!(bound, 0.0),
                }
                assert!(
                    (got - median).abs() <= bound + slack,
                    "column {j}, {trials} trials: median {got}, exact {median}, bound {bound:e}"
                );
            }
        }
    }

    #[test]
    fn worst_heap_keeps_what_a_sort_of_every_trial_puts_first() {
        // Margins on a coarse grid, so many tie and the index decides.
        let mut rng = ChaCha8Rng::seed_from_u64(9);
        let trials: Vec<TrialSummary> = (0..2000)
            .map(|trial| {
                let margin_db = (unit(&mut rng) * 40.0).floor() / 4.0 - 5.0;
                TrialSummary {
                    trial,
                    passed: margin_db >= 0.0,
                    stable: true,
                    margin_db,
                    at_hz: 1.0,
                    gain_db: 0.0,
                    limit_db: 0.0,
                    lower_bound: true,
                    max_deviation_db: 0.0,
                    delay_spread_s: None,
                    delay_ok: true,
                }
            })
            .collect();
        let mut sorted = trials.clone();
        sorted.sort_by(|a, b| {
            a.margin_db
                .total_cmp(&b.margin_db)
                .then(a.trial.cmp(&b.trial))
        });
        for count in [0, 1, 5, 137, 2000, 3000] {
            let mut worst = Worst::new(count);
            for &t in &trials {
                worst.add(t);
            }
            assert_eq!(worst.into_sorted(), sorted[..count.min(2000)], "{count}");
        }
    }
}

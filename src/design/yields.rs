//! The specification as a mask of absolute dB limits, and the Monte Carlo
//! yield of a built network against it.

use super::{passbands, Design, DesignError};
use crate::analysis::{
    monte_carlo, Limit, Mask, MonteCarlo, MonteCarloResult, Scope, ToleranceRule,
};
use crate::circuit::{log_grid, AcSystem, Netlist};
use crate::parts::{Distribution, Series, Tolerance};
use crate::spec::{Edge, PrototypeSource, SeriesChoice, SpreadChoice};
use crate::transform::Mapping;

/// Points of the Monte Carlo frequency grid (the edges are added).
pub const MONTE_CARLO_POINTS: usize = 200;

/// Slack of every mask limit, dB: an equiripple response touches its
/// ripple limit exactly at each ripple minimum, and rounding must not turn
/// that into a failure. Far below anything a measurement resolves.
pub const MASK_SLACK_DB: f64 = 1e-6;

/// How many of the worst trials a run reports.
pub const WORST_TRIALS: usize = 5;

/// The parts series of a design-file name.
pub fn series(s: SeriesChoice) -> Series {
    match s {
        SeriesChoice::E3 => Series::E3,
        SeriesChoice::E6 => Series::E6,
        SeriesChoice::E12 => Series::E12,
        SeriesChoice::E24 => Series::E24,
        SeriesChoice::E48 => Series::E48,
        SeriesChoice::E96 => Series::E96,
        SeriesChoice::E192 => Series::E192,
    }
}

/// The stopbands of a mapping for the given stopband edges, within the
/// band `(lo, hi)` looked at, Hz.
fn stopbands(mapping: Mapping, stop: Edge, (lo, hi): (f64, f64)) -> Vec<[f64; 2]> {
    match (mapping, stop) {
        (Mapping::Lowpass(_), Edge::Single(s)) => vec![[s, hi.max(s)]],
        (Mapping::Highpass(_), Edge::Single(s)) => vec![[lo.min(s), s]],
        (Mapping::Bandpass(..), Edge::Pair(a, b)) => vec![[lo.min(a), a], [b, hi.max(b)]],
        (Mapping::Bandstop(..), Edge::Pair(a, b)) => vec![[a, b]],
        // Spec validation makes the stopband's shape match the kind.
        (m, s) => unreachable!("stopband {s:?} does not fit {m:?}"),
    }
}

impl Design {
    /// The passband level: the terminations' divider, dB (a lossless
    /// ladder passes all available power at its reflection zeros; common
    /// practice).
    pub fn passband_level_db(&self) -> f64 {
        20.0 * (self.spec.load_ohm / (self.spec.source_ohm + self.spec.load_ohm)).log10()
    }

    /// The specification as absolute dB limits: across each passband no
    /// lower than the level less the ripple (and the extra margin), across
    /// each stopband no higher than the level less the attenuation (and
    /// its margin). Above the level there is no limit: a gain a hair above
    /// the divider is not a failure of the specification.
    pub fn mask_limits(&self) -> Vec<Limit> {
        let band = self.default_band();
        let level = self.passband_level_db();
        let mc = &self.spec.montecarlo;
        let (ripple, attenuation) = match &self.spec.prototype {
            PrototypeSource::Family {
                passband_ripple_db,
                stopband_attenuation_db,
                ..
            } => (*passband_ripple_db, *stopband_attenuation_db),
            PrototypeSource::Table { .. } => (
                self.table.as_ref().map_or(0.0, |t| t.passband_ripple_db),
                None,
            ),
        };
        let mut limits: Vec<Limit> = passbands(self.mapping, band)
            .into_iter()
            .map(|[from_hz, to_hz]| Limit {
                from_hz,
                to_hz,
                min_db: level - ripple + mc.passband_margin_db - MASK_SLACK_DB,
                max_db: f64::INFINITY,
            })
            .collect();
        if let (Some(stop), Some(att)) = (self.spec.stopband_edge_hz, attenuation) {
            limits.extend(stopbands(self.mapping, stop, band).into_iter().map(
                |[from_hz, to_hz]| Limit {
                    from_hz,
                    to_hz,
                    min_db: f64::NEG_INFINITY,
                    max_db: level - att - mc.stopband_margin_db + MASK_SLACK_DB,
                },
            ));
        }
        limits
    }

    /// The Monte Carlo frequency grid: log-spaced over the default band,
    /// with every mask edge added so each limit is sampled where it is
    /// tightest.
    pub fn monte_carlo_grid(&self) -> Result<Vec<f64>, DesignError> {
        let (lo, hi) = self.default_band();
        let mut grid =
            log_grid(lo, hi, MONTE_CARLO_POINTS).map_err(|cause| DesignError::Circuit {
                file: self.spec.file.clone(),
                cause,
            })?;
        for l in self.mask_limits() {
            grid.extend([l.from_hz, l.to_hz]);
        }
        grid.sort_by(f64::total_cmp);
        grid.dedup();
        Ok(grid)
    }

    /// The tolerance rules of the design file: every resistor, every
    /// capacitor, every op-amp's gain-bandwidth (an active build has no
    /// inductor to vary).
    pub fn tolerance_rules(&self) -> Result<Vec<ToleranceRule>, DesignError> {
        let p = &self.spec.parts;
        let distribution = match p.distribution {
            SpreadChoice::Uniform => Distribution::Uniform,
            SpreadChoice::Gaussian => Distribution::Gaussian,
        };
        let rule = |scope, relative| {
            Tolerance::new(relative, distribution)
                .map(|tolerance| ToleranceRule { scope, tolerance })
                .map_err(|e| DesignError::Export {
                    file: self.spec.file.clone(),
                    cause: e.to_string(),
                })
        };
        Ok(vec![
            rule(Scope::Resistors, p.resistor_tolerance)?,
            rule(Scope::Capacitors, p.capacitor_tolerance)?,
            rule(Scope::OpAmpGbw, self.spec.montecarlo.gbw_spread)?,
        ])
    }

    /// The Monte Carlo yield of `netlist` (a build of this design) against
    /// the specification, with the design file's tolerances, trials and
    /// seed. Runs on the current rayon pool; `progress` is told how many
    /// trials are done.
    pub fn monte_carlo(
        &self,
        netlist: &Netlist,
        trials: usize,
        seed: u64,
        progress: Option<&(dyn Fn(usize) + Sync)>,
    ) -> Result<MonteCarloResult, DesignError> {
        let file = || self.spec.file.clone();
        let circuit = |cause| DesignError::Circuit {
            file: file(),
            cause,
        };
        let analysis = |cause| DesignError::Analysis {
            file: file(),
            cause,
        };
        let mask = Mask::new(self.mask_limits()).map_err(analysis)?;
        let freqs = self.monte_carlo_grid()?;
        let rules = self.tolerance_rules()?;
        let system = AcSystem::new(netlist).map_err(circuit)?;
        let setup = MonteCarlo {
            out: netlist.require_node("out").map_err(circuit)?,
            inp: netlist.require_node("in").map_err(circuit)?,
            freqs_hz: &freqs,
            rules: &rules,
            mask: &mask,
            trials,
            seed,
            worst: WORST_TRIALS,
        };
        monte_carlo(&system, &setup, progress).map_err(analysis)
    }
}

/// The envelope of a run as CSV:
/// `freq_hz,nominal_db,min_db,median_db,max_db`.
pub fn envelope_csv(r: &MonteCarloResult) -> String {
    let mut s = String::from("freq_hz,nominal_db,min_db,median_db,max_db\n");
    for i in 0..r.freq_hz.len() {
        s.push_str(&format!(
            "{:.9e},{:.6},{:.6},{:.6},{:.6}\n",
            r.freq_hz[i],
            r.nominal_db[i],
            r.envelope.min_db[i],
            r.envelope.median_db[i],
            r.envelope.max_db[i]
        ));
    }
    s
}

/// The run's account in words: yield and the worst trials.
pub fn yield_summary(r: &MonteCarloResult, seed: u64) -> String {
    let trials = r.per_trial.len();
    let mut s = format!(
        "Monte Carlo: {trials} trials, seed {seed}: yield {:.2} % ({} passed)\n",
        100.0 * r.yield_fraction,
        r.passed
    );
    for t in &r.worst {
        s.push_str(&format!(
            "  trial {:>7}: margin {:+.4} dB, largest deviation from nominal {:.4} dB{}\n",
            t.trial,
            t.margin_db,
            t.max_deviation_db,
            if t.passed { "" } else { "  FAILS" }
        ));
    }
    s
}

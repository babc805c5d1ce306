//! The two active builds of a design, each measured against the passive
//! ideal: the active exact build (converters with exact values) and the
//! active on parts build (preferred values, trimmed), which is what gets
//! soldered and so what the headline figures describe.

use super::{Design, DesignError};
use crate::active::{self, ActiveBuild, Options};
use crate::analysis::{
    bias_offsets, compare, opamp_levels, BiasOffsets, ComparePoints, Comparison, OpAmpLevel,
    LEVEL_POINTS,
};
use crate::circuit::{band_grid, log_grid, response, AcSystem, Netlist};
use crate::realize::{choose_levels, generator_level_v, snap_build, ConverterLevels, SnappedBuild};

/// How one build compares with the passive ideal, and its op-amp levels.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct BuildFigures {
    /// Deviation, edge shifts and stopband gains against the passive
    /// ideal.
    pub comparison: Comparison,
    /// Peak gain from the input to every op-amp output, and the input
    /// level the design file's swing allows.
    pub levels: Vec<OpAmpLevel>,
    /// Where a highpass or bandstop passband stops being checked
    /// ([`Design::top_of_range_hz`]), and the build's deviation there.
    pub top_of_range: Option<TopOfRange>,
    /// The DC the op-amps' input bias currents put at `out` and at the
    /// op-amp outputs; `None` when no DC path takes them (or no op-amp).
    pub bias: Option<BiasOffsets>,
}

/// A build at the top of the op-amp range.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct TopOfRange {
    /// The frequency, Hz.
    pub freq_hz: f64,
    /// The build's gain there against the passive ideal's, dB (negative:
    /// a loss).
    pub deviation_db: f64,
}

impl BuildFigures {
    /// The op-amp whose output swings highest (the one that clips first),
    /// if the build has any.
    pub fn highest_level(&self) -> Option<&OpAmpLevel> {
        self.levels
            .iter()
            .max_by(|a, b| a.peak_gain_db.total_cmp(&b.peak_gain_db))
    }
}

/// The active builds of a design and their figures.
#[derive(Debug, Clone)]
pub struct ActiveDesign {
    /// The active exact build.
    pub build: ActiveBuild,
    /// The active on parts build: preferred values, trimmed.
    pub on_parts: SnappedBuild,
    /// Each converter's level on parts, chosen for dynamic range.
    pub levels: ConverterLevels,
    /// The active exact build against the passive ideal.
    pub exact_figures: BuildFigures,
    /// The active on parts build against the passive ideal (the headline).
    pub on_parts_figures: BuildFigures,
}

impl Design {
    /// The realization options of the design file: where the converters
    /// are balanced (see [`crate::transform::Band::balance_hz`]), the
    /// method, the op-amp model, the passbands.
    pub fn active_options(&self) -> Options {
        Options {
            method: self.spec.active.method,
            opamp: self.spec.opamp.model,
            balance_hz: self.spec.band.balance_hz(),
            optimize: self.spec.active.optimize,
            passband_ripple_db: Some(self.passband_ripple_db()),
            passband_hz: self.passbands_hz(),
            gbw_spread: self.spec.montecarlo.gbw_spread,
            dc_path_max_ohm: self.spec.parts.dc_path_max_ohm,
            ..Options::new(1.0)
        }
    }

    /// Where builds are compared with the passive ideal: each passband
    /// edge where the ladder was synthesized to have it (the
    /// specification's, or pre-widened by the design for yield: there
    /// the passive ideal's gain falls through its ripple level, where a
    /// build's crossing is well defined; at the specification's edge,
    /// inside the pre-widened passband, it is a ripple's, which a build
    /// crossed 11.7 % away).
    pub fn compare_points(&self) -> Result<ComparePoints, DesignError> {
        let passband_edges_hz = match self.margins.edge_scale {
            1.0 => self.spec.band.passband_edges_hz(),
            k => self.spec.band.frequencies_hz(k),
        };
        Ok(ComparePoints {
            passband_grid_hz: band_grid(&self.passbands_hz(), active::PASSBAND_POINTS)
                .map_err(|cause| self.circuit_error(cause))?,
            passband_edges_hz,
            stopband_edges_hz: self.spec.band.stopband_edges_hz(),
            passband_level_db: self.passband_level_db(),
        })
    }

    /// Builds the active exact network the design file asks for, puts it
    /// on real parts, and measures both against the passive ideal.
    pub fn active(&self) -> Result<ActiveDesign, DesignError> {
        let file = || self.spec.file.clone();
        let opts = self.active_options();
        let build = active::realize(&self.passive, &opts).map_err(|cause| DesignError::Active {
            file: file(),
            cause,
        })?;
        let parts = |cause| DesignError::Parts {
            file: file(),
            cause,
        };
        // A failed noise or current analysis costs the levels, not the
        // build: the nearest values are what the parts stage had before.
        let levels = match choose_levels(&build, &self.spec.parts, &self.level_goal()?) {
            Ok(levels) => levels,
            Err(cause) if cause.is_bad_input() => return Err(parts(cause)),
            Err(cause) => ConverterLevels::unchosen(cause.to_string()),
        };
        let mut on_parts = snap_build(
            &self.passive,
            &build,
            &self.spec.parts,
            &opts.passband_hz,
            Some(&levels),
        )
        .map_err(parts)?;
        for step in &mut on_parts.procedure {
            step.generator_v_peak = generator_level_v(step.opamp_gain, self.spec.opamp.swing_v);
        }
        let points = self.compare_points()?;
        Ok(ActiveDesign {
            exact_figures: self.figures(&build.netlist, &points)?,
            on_parts_figures: self.figures(&on_parts.netlist, &points)?,
            build,
            on_parts,
            levels,
        })
    }

    /// One build's figures.
    fn figures(
        &self,
        netlist: &Netlist,
        points: &ComparePoints,
    ) -> Result<BuildFigures, DesignError> {
        let (lo, hi) = self.view_hz();
        let grid = log_grid(lo, hi, LEVEL_POINTS).map_err(|cause| self.circuit_error(cause))?;
        let top_of_range = match self.top_of_range_hz() {
            Some(freq_hz) => {
                let at = |n: &Netlist| {
                    response(n, &[freq_hz])
                        .map(|r| r.h[0])
                        .map_err(|cause| self.circuit_error(cause))
                };
                let ratio = at(netlist)? / at(&self.passive)?;
                Some(TopOfRange {
                    freq_hz,
                    deviation_db: 20.0 * ratio.norm().log10(),
                })
            }
            None => None,
        };
        let circuit = |cause| self.circuit_error(cause);
        let out = netlist.require_node("out").map_err(circuit)?;
        let system = AcSystem::new(netlist).map_err(circuit)?;
        Ok(BuildFigures {
            comparison: compare(&self.passive, netlist, points)
                .map_err(|cause| self.analysis_error(cause))?,
            levels: self.levels(netlist, &grid)?,
            top_of_range,
            bias: bias_offsets(&system, out, self.spec.opamp.bias_current_a)
                .map_err(|cause| self.analysis_error(cause))?,
        })
    }

    /// Peak gain from the input to every op-amp output of `netlist` over
    /// `freq_hz`, and the input level the design file's swing allows.
    pub fn levels(
        &self,
        netlist: &Netlist,
        freq_hz: &[f64],
    ) -> Result<Vec<OpAmpLevel>, DesignError> {
        let inp = netlist
            .require_node("in")
            .map_err(|cause| self.circuit_error(cause))?;
        let mut system = AcSystem::new(netlist).map_err(|cause| self.circuit_error(cause))?;
        opamp_levels(&mut system, inp, freq_hz, self.spec.opamp.swing_v)
            .map_err(|cause| self.analysis_error(cause))
    }

    /// A circuit failure, naming the design file.
    pub(super) fn circuit_error(&self, cause: crate::circuit::CircuitError) -> DesignError {
        DesignError::Circuit {
            file: self.spec.file.clone(),
            cause,
        }
    }

    /// An analysis failure, naming the design file.
    pub(super) fn analysis_error(&self, cause: crate::analysis::AnalysisError) -> DesignError {
        DesignError::Analysis {
            file: self.spec.file.clone(),
            cause,
        }
    }
}

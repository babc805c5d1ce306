//! The active build of a design: the realization options that follow from
//! the design file, and the comparison of the active network with the
//! passive ideal that a designer reads before building it.

use super::{response, Design, DesignError};
use crate::active::{self, ActiveBuild, Method, Options};
use crate::analysis::opamp_levels;
use crate::circuit::{log_grid, AcSystem, CircuitError, Netlist, OpAmpModel};
use crate::spec::{MethodChoice, OpAmpKind, OpAmpSpec};
use crate::transform::Mapping;

/// Points of the grid on which op-amp output levels are searched.
const LEVEL_POINTS: usize = 400;
/// Half-width of the window (as a frequency ratio) in which a shifted
/// passband edge is looked for: a converter error of a few percent moves
/// the edge by about as much; 25 % is far beyond any usable build.
const EDGE_WINDOW: f64 = 1.25;
/// Points of that window; its spacing (0.1 %) bounds the interpolation.
const EDGE_POINTS: usize = 401;
/// Output swing used only to rank the op-amp levels here; the gains do not
/// depend on it.
const UNIT_SWING_V: f64 = 1.0;

/// The op-amp model of a design file.
pub fn opamp_model(o: &OpAmpSpec) -> OpAmpModel {
    match o.model {
        OpAmpKind::Ideal => OpAmpModel::Ideal,
        OpAmpKind::SinglePole => OpAmpModel::SinglePole {
            dc_gain: 10f64.powf(o.dc_gain_db / 20.0),
            gbw_hz: o.gbw_hz,
            output_ohm: o.output_ohm,
        },
    }
}

fn method(m: MethodChoice) -> Method {
    match m {
        MethodChoice::Auto => Method::Auto,
        MethodChoice::Gic => Method::Gic,
        MethodChoice::Fdnr => Method::Fdnr,
    }
}

/// The passbands of a mapping within the band `(lo, hi)` looked at, Hz.
pub fn passbands(mapping: Mapping, (lo, hi): (f64, f64)) -> Vec<[f64; 2]> {
    match mapping {
        Mapping::Lowpass(f) => vec![[lo, f]],
        Mapping::Highpass(f) => vec![[f, hi]],
        Mapping::Bandpass(a, b) => vec![[a, b]],
        Mapping::Bandstop(a, b) => vec![[lo, a], [b, hi]],
    }
}

/// The passband edges of a mapping, Hz.
fn passband_edges(mapping: Mapping) -> Vec<f64> {
    match mapping {
        Mapping::Lowpass(f) | Mapping::Highpass(f) => vec![f],
        Mapping::Bandpass(a, b) | Mapping::Bandstop(a, b) => vec![a, b],
    }
}

/// What a designer compares between the active build and the passive
/// ideal (the `active` part of `report.json`).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Comparison {
    /// The realization used.
    pub method: Method,
    /// Why it was chosen, in words.
    pub why: String,
    /// The op-amp model it was simulated with.
    pub opamp: OpAmpModel,
    /// Number of op-amps.
    pub opamps: usize,
    /// Number of capacitors.
    pub capacitors: usize,
    /// Largest over smallest capacitance.
    pub capacitor_spread: f64,
    /// Largest deviation from the passive ideal across the passband(s), dB.
    pub passband_deviation_db: f64,
    /// The passband edges of the specification, Hz.
    pub passband_edge_hz: Vec<f64>,
    /// Where the active response crosses the passive ideal's level at each
    /// edge, Hz (`None` if not within 25 % of the edge).
    pub active_edge_hz: Vec<Option<f64>>,
    /// The shift of each edge, percent of the edge frequency.
    pub edge_shift_percent: Vec<Option<f64>>,
    /// The stopband edges of the specification, Hz (empty without one).
    pub stopband_edge_hz: Vec<f64>,
    /// Attenuation of the active build at each stopband edge, relative to
    /// the passband level of the terminations' divider, dB.
    pub attenuation_at_stopband_edge_db: Vec<f64>,
    /// The same for the passive ideal, dB.
    pub passive_attenuation_at_stopband_edge_db: Vec<f64>,
    /// Largest gain from the input to any op-amp output, dB.
    pub largest_opamp_gain_db: f64,
    /// The op-amp with that gain.
    pub largest_opamp_gain_at: String,
    /// The frequency of that gain, Hz.
    pub largest_opamp_gain_hz: f64,
    /// Whether the network is stable with the op-amp model.
    pub stable: bool,
    /// The natural frequency with the largest real part, rad/s, as
    /// [re, im].
    pub rightmost_natural_frequency: Option<[f64; 2]>,
    /// Notes of the realization (series swaps, DC-path effect, refinement).
    pub notes: Vec<String>,
}

/// The active network and its comparison with the passive ideal.
#[derive(Debug, Clone)]
pub struct ActiveDesign {
    /// The realization.
    pub build: ActiveBuild,
    /// The comparison.
    pub comparison: Comparison,
}

impl Design {
    /// Builds the active network the design file asks for, with its
    /// op-amp model, and compares it with the passive ideal.
    pub fn active(&self) -> Result<ActiveDesign, DesignError> {
        let file = || self.spec.file.clone();
        let band = self.default_band();
        let edges = passband_edges(self.mapping);
        let opts = Options {
            method: method(self.spec.active.method),
            opamp: opamp_model(&self.spec.opamp),
            // The converters are balanced where the response is most
            // sensitive to their error: at the passband edge, or between
            // the two edges of a band kind (domain notes, section 4).
            balance_hz: edges.iter().product::<f64>().powf(1.0 / edges.len() as f64),
            optimize: self.spec.active.optimize,
            passband_hz: passbands(self.mapping, band),
            ..Options::new(1.0)
        };
        let build = active::realize(&self.passive, &opts).map_err(|cause| DesignError::Active {
            file: file(),
            cause,
        })?;
        let comparison = self.compare(&build, opts.opamp, band)?;
        Ok(ActiveDesign { build, comparison })
    }

    fn compare(
        &self,
        build: &ActiveBuild,
        opamp: OpAmpModel,
        band: (f64, f64),
    ) -> Result<Comparison, DesignError> {
        let circuit = |cause: CircuitError| DesignError::Circuit {
            file: self.spec.file.clone(),
            cause,
        };
        let mut c = self.compare_responses(build, opamp).map_err(circuit)?;
        let grid = log_grid(band.0, band.1, LEVEL_POINTS).map_err(circuit)?;
        let mut system = AcSystem::new(&build.netlist).map_err(circuit)?;
        let inp = build.netlist.require_node("in").map_err(circuit)?;
        let levels = opamp_levels(&mut system, inp, &grid, UNIT_SWING_V).map_err(|cause| {
            DesignError::Analysis {
                file: self.spec.file.clone(),
                cause,
            }
        })?;
        if let Some(top) = levels
            .iter()
            .max_by(|a, b| a.peak_gain_db.total_cmp(&b.peak_gain_db))
        {
            c.largest_opamp_gain_db = top.peak_gain_db;
            c.largest_opamp_gain_at = top.name.clone();
            c.largest_opamp_gain_hz = top.peak_freq_hz;
        }
        Ok(c)
    }

    /// Everything of the comparison that needs only the two responses.
    fn compare_responses(
        &self,
        build: &ActiveBuild,
        opamp: OpAmpModel,
    ) -> Result<Comparison, CircuitError> {
        let passband_edge_hz = passband_edges(self.mapping);
        let mut active_edge_hz = Vec::new();
        for &edge in &passband_edge_hz {
            let level = response(&self.passive, &[edge])?.db()[0];
            active_edge_hz.push(crossing_near(&build.netlist, edge, level)?);
        }
        let edge_shift_percent = active_edge_hz
            .iter()
            .zip(&passband_edge_hz)
            .map(|(a, e)| a.map(|a| 100.0 * (a - e) / e))
            .collect();
        let stopband_edge_hz = match self.spec.stopband_edge_hz {
            None => Vec::new(),
            Some(crate::spec::Edge::Single(f)) => vec![f],
            Some(crate::spec::Edge::Pair(a, b)) => vec![a, b],
        };
        let divider_db =
            20.0 * (self.spec.load_ohm / (self.spec.source_ohm + self.spec.load_ohm)).log10();
        let attenuation = |net: &Netlist| -> Result<Vec<f64>, CircuitError> {
            Ok(response(net, &stopband_edge_hz)?
                .db()
                .iter()
                .map(|g| divider_db - g)
                .collect())
        };
        Ok(Comparison {
            method: build.method_used,
            why: build.why.clone(),
            opamp,
            opamps: build.opamps,
            capacitors: build.capacitors,
            capacitor_spread: build.capacitor_spread,
            passband_deviation_db: build.passband_deviation_db.unwrap_or(f64::NAN),
            passband_edge_hz,
            active_edge_hz,
            edge_shift_percent,
            attenuation_at_stopband_edge_db: attenuation(&build.netlist)?,
            passive_attenuation_at_stopband_edge_db: attenuation(&self.passive)?,
            stopband_edge_hz,
            largest_opamp_gain_db: f64::NAN,
            largest_opamp_gain_at: String::new(),
            largest_opamp_gain_hz: f64::NAN,
            stable: build.stability.is_none_or(|v| v.stable),
            rightmost_natural_frequency: build
                .stability
                .and_then(|v| v.rightmost)
                .map(|r| [r.re, r.im]),
            notes: build.notes.clone(),
        })
    }
}

/// The frequency within [`EDGE_WINDOW`] of `edge` where the response of
/// `netlist` crosses `level_db`, nearest to the edge, interpolated
/// linearly in log frequency.
fn crossing_near(netlist: &Netlist, edge: f64, level_db: f64) -> Result<Option<f64>, CircuitError> {
    let grid = log_grid(edge / EDGE_WINDOW, edge * EDGE_WINDOW, EDGE_POINTS)?;
    let db = response(netlist, &grid)?.db();
    let mut best: Option<f64> = None;
    for i in 1..grid.len() {
        let (a, b) = (db[i - 1] - level_db, db[i] - level_db);
        if a == 0.0 || a.signum() != b.signum() {
            let t = if a == b { 0.0 } else { a / (a - b) };
            let f = (grid[i - 1].ln() + t * (grid[i].ln() - grid[i - 1].ln())).exp();
            if best.is_none_or(|x| (x / edge).ln().abs() > (f / edge).ln().abs()) {
                best = Some(f);
            }
        }
    }
    Ok(best)
}

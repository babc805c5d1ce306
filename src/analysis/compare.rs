//! A build compared with the passive ideal: the largest passband
//! deviation, where each passband edge moved, and the gain at each
//! stopband edge. The same measure serves the active exact and the active
//! on parts builds, so their figures can stand side by side.

use super::{trace, AnalysisError};
use crate::circuit::{log_grid, Netlist};

/// Half-width of the window (as a frequency ratio) in which a shifted
/// passband edge is looked for: a converter error of a few percent moves
/// the edge by about as much; 25 % is far beyond any usable build.
pub const EDGE_WINDOW: f64 = 1.25;

/// Points of that window; its spacing (0.1 %) bounds the interpolation.
const EDGE_POINTS: usize = 401;

/// The passband level of a doubly terminated ladder: the terminations'
/// divider, dB (a lossless ladder passes all available power at its
/// reflection zeros; common practice).
pub fn passband_level_db(source_ohm: f64, load_ohm: f64) -> f64 {
    20.0 * (load_ohm / (source_ohm + load_ohm)).log10()
}

/// Where a build is measured.
#[derive(Debug, Clone, PartialEq)]
pub struct ComparePoints {
    /// A grid over the passband(s), Hz, for the largest deviation.
    pub passband_grid_hz: Vec<f64>,
    /// The passband edges, Hz.
    pub passband_edges_hz: Vec<f64>,
    /// The stopband edges, Hz (empty without a stopband).
    pub stopband_edges_hz: Vec<f64>,
    /// The passband level the stopband gains are measured from, dB.
    pub passband_level_db: f64,
}

/// One build against the passive ideal.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Comparison {
    /// Largest |gain difference| from the passive ideal over the passband
    /// grid, dB.
    pub passband_deviation_db: f64,
    /// The passband edges the ladder was synthesized for, Hz.
    pub passband_edge_hz: Vec<f64>,
    /// Where the build crosses the passive ideal's gain at each edge, Hz
    /// (`None` if not within [`EDGE_WINDOW`] of the edge).
    pub edge_hz: Vec<Option<f64>>,
    /// The shift of each edge, percent of the edge frequency.
    pub edge_shift_percent: Vec<Option<f64>>,
    /// The stopband edges of the specification, Hz.
    pub stopband_edge_hz: Vec<f64>,
    /// The build's gain at each stopband edge relative to the passband
    /// level, dB (negative: an attenuation of that many dB).
    pub stopband_edge_gain_db: Vec<f64>,
}

/// Gains of `netlist` (nodes `in`, `out`) at `freqs_hz` (ascending), dB,
/// through the fast exact path of [`trace`].
fn gains_db(netlist: &Netlist, freqs_hz: &[f64]) -> Result<Vec<f64>, AnalysisError> {
    Ok(trace(netlist, freqs_hz, false)?.gain_db)
}

/// `build` against `reference` (the passive ideal) at `points`.
pub fn compare(
    reference: &Netlist,
    build: &Netlist,
    points: &ComparePoints,
) -> Result<Comparison, AnalysisError> {
    if points.passband_grid_hz.is_empty() {
        return Err(AnalysisError::EmptyGrid {
            what: "passband comparison",
        });
    }
    let (want, got) = (
        gains_db(reference, &points.passband_grid_hz)?,
        gains_db(build, &points.passband_grid_hz)?,
    );
    let passband_deviation_db = want
        .iter()
        .zip(&got)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    let mut edge_hz = Vec::new();
    for &edge in &points.passband_edges_hz {
        let level = gains_db(reference, &[edge])?[0];
        edge_hz.push(crossing_near(build, edge, level)?);
    }
    let edge_shift_percent = edge_hz
        .iter()
        .zip(&points.passband_edges_hz)
        .map(|(a, e)| a.map(|a| 100.0 * (a - e) / e))
        .collect();
    let stopband_edge_gain_db = match points.stopband_edges_hz.is_empty() {
        true => Vec::new(),
        false => gains_db(build, &points.stopband_edges_hz)?
            .iter()
            .map(|g| g - points.passband_level_db)
            .collect(),
    };
    Ok(Comparison {
        passband_deviation_db,
        passband_edge_hz: points.passband_edges_hz.clone(),
        edge_hz,
        edge_shift_percent,
        stopband_edge_hz: points.stopband_edges_hz.clone(),
        stopband_edge_gain_db,
    })
}

/// The frequency within [`EDGE_WINDOW`] of `edge` where the response of
/// `netlist` crosses `level_db`, nearest to the edge, interpolated
/// linearly in log frequency.
fn crossing_near(
    netlist: &Netlist,
    edge: f64,
    level_db: f64,
) -> Result<Option<f64>, AnalysisError> {
    let grid = log_grid(edge / EDGE_WINDOW, edge * EDGE_WINDOW, EDGE_POINTS)?;
    let db = gains_db(netlist, &grid)?;
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

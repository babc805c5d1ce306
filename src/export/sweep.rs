//! The table `nocoil sweep` prints, streamed: the passive ideal's gain,
//! phase and exact group delay and the active on parts build's gain and
//! phase over one grid, as CSV, every value finite (see
//! [`crate::analysis::trace`]).
//!
//! This is the one renderer that drives a solver itself, so that a long
//! table is never held whole: it is made and written in rounds of one
//! block of rows per rayon thread. Each block solves both networks for
//! its rows with its own copies of [`crate::analysis::Tracer`], the
//! phases are unwrapped block after block in grid order, each block
//! formats its rows, and the blocks are written in order. Every buffer is
//! reused from round to round, so a long table touches no fresh memory per
//! row (on the project's machine, memory touched for the first time cost a
//! 100,000-point trace about 0.2 us per point, beside about 0.3 us for its
//! solve), and the text is the same as that of
//! [`crate::analysis::trace`] and [`super::csv::sweep_csv`] on any thread
//! count (`tests/sweep.rs`).

use std::ops::Range;

use rayon::prelude::*;

use super::csv::{append_csv_rows, csv_header, CsvError};
use crate::analysis::{unwrap_deg, AnalysisError, Tracer};
use crate::circuit::Netlist;

/// The columns after `freq_hz`, in order: the passive ideal and the
/// active on parts build, as the glossary names them.
pub const SWEEP_COLUMNS: [&str; 5] = [
    "passive_ideal_gain_db",
    "passive_ideal_phase_deg",
    "passive_ideal_group_delay_s",
    "active_on_parts_gain_db",
    "active_on_parts_phase_deg",
];

/// Why the table was not written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SweepError {
    /// A network could not be solved on the grid (a program fault: the
    /// grid and the networks come checked).
    #[error("sweeping: {0}")]
    Analysis(#[from] AnalysisError),
    /// The table could not be formatted or written.
    #[error(transparent)]
    Csv(#[from] CsvError),
    /// The output refused the text (a closed pipe, a full disk).
    #[error(transparent)]
    Io(#[from] std::io::Error),
}

/// Rows one block holds: a block's solve and formatting take about two
/// milliseconds, far above rayon's scheduling, and its buffers (columns
/// and text) stay under a megabyte.
const BLOCK_ROWS: usize = 4096;

/// One thread's share of a round.
struct Block {
    passive: Tracer,
    active: Tracer,
    /// Its rows of the grid.
    rows: Range<usize>,
    /// The columns of [`SWEEP_COLUMNS`] for its rows (the phases in
    /// radians until unwrapped).
    columns: [Vec<f64>; 5],
    /// Its rows as CSV.
    text: String,
}

impl Block {
    fn solve(&mut self, freqs_hz: &[f64]) -> Result<(), AnalysisError> {
        let freqs = &freqs_hz[self.rows.clone()];
        for column in &mut self.columns {
            column.resize(freqs.len(), 0.0);
        }
        let [gain, phase, delay, active_gain, active_phase] = &mut self.columns;
        self.passive.solve(freqs, gain, phase, delay)?;
        self.active.solve(freqs, active_gain, active_phase, &mut [])
    }

    fn write(&mut self, freqs_hz: &[f64]) -> Result<(), CsvError> {
        self.text.clear();
        let named: Vec<(&str, &[f64])> = SWEEP_COLUMNS
            .into_iter()
            .zip(self.columns.iter().map(Vec::as_slice))
            .collect();
        append_csv_rows(&mut self.text, &freqs_hz[self.rows.clone()], &named)
    }
}

/// The sweep table of `passive` (the passive ideal, with its group delay)
/// and `on_parts` (the active on parts build) at `freqs_hz` (finite, at
/// least 0, strictly ascending), as CSV with the header `freq_hz,` and
/// [`SWEEP_COLUMNS`]; see [`write_sweep_csv`].
pub fn sweep_table_csv(
    passive: &Netlist,
    on_parts: &Netlist,
    freqs_hz: &[f64],
) -> Result<String, SweepError> {
    let mut bytes = Vec::new();
    write_sweep_csv(passive, on_parts, freqs_hz, &mut bytes)?;
    // Every field is ASCII (digits, signs, names of plain letters).
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

/// [`sweep_table_csv`] written to `out` block by block, as `nocoil sweep`
/// prints it (see the module documentation).
pub fn write_sweep_csv<W: std::io::Write + ?Sized>(
    passive: &Netlist,
    on_parts: &Netlist,
    freqs_hz: &[f64],
    out: &mut W,
) -> Result<(), SweepError> {
    // The two solvers are built side by side.
    let (passive, active) = rayon::join(
        || Tracer::new(passive, freqs_hz, true),
        || Tracer::new(on_parts, freqs_hz, false),
    );
    let (passive, active) = (passive?, active?);
    out.write_all(csv_header(&SWEEP_COLUMNS)?.as_bytes())?;
    let n = freqs_hz.len();
    let tasks = rayon::current_num_threads().clamp(1, n.div_ceil(BLOCK_ROWS).max(1));
    let mut blocks: Vec<Block> = (0..tasks)
        .map(|_| Block {
            passive: passive.clone(),
            active: active.clone(),
            rows: 0..0,
            columns: Default::default(),
            text: String::new(),
        })
        .collect();
    let (mut passive_last, mut active_last) = (None, None);
    for round in (0..n).step_by(tasks * BLOCK_ROWS) {
        for (k, block) in blocks.iter_mut().enumerate() {
            let start = n.min(round + k * BLOCK_ROWS);
            block.rows = start..n.min(start + BLOCK_ROWS);
        }
        let solved: Vec<_> = blocks.par_iter_mut().map(|b| b.solve(freqs_hz)).collect();
        // In grid order: the error of the lowest failing frequency.
        solved.into_iter().collect::<Result<(), _>>()?;
        for block in &mut blocks {
            unwrap_deg(&mut passive_last, &mut block.columns[1]);
            unwrap_deg(&mut active_last, &mut block.columns[4]);
        }
        let written: Vec<_> = blocks.par_iter_mut().map(|b| b.write(freqs_hz)).collect();
        written.into_iter().collect::<Result<(), _>>()?;
        for block in &blocks {
            out.write_all(block.text.as_bytes())?;
        }
    }
    Ok(())
}

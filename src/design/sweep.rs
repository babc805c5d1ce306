//! The table `nocoil sweep` prints: the passive ideal's gain, phase and
//! exact group delay and the active build's gain and phase over one grid,
//! as CSV, every value finite (see [`crate::analysis::trace`]).
//!
//! The table is made and written in rounds of one block of rows per rayon
//! thread: each block solves both networks for its rows with its own
//! copies of the solvers, the phases are unwrapped block after block in
//! grid order, each block formats its rows, and the blocks are written in
//! order. Every buffer is reused from round to round, so a long table
//! touches no fresh memory per row (on the project's machine, memory
//! touched for the first time cost a 100,000-point trace about 0.2 us per
//! point, beside about 0.3 us for its solve), and the text is the same as
//! that of [`crate::analysis::trace`] and
//! [`crate::export::csv::sweep_csv`] on any thread count
//! (`tests/sweep.rs`).

use std::ops::Range;

use rayon::prelude::*;

use super::{Design, DesignError};
use crate::analysis::{unwrap_deg, AnalysisError, Tracer};
use crate::circuit::Netlist;
use crate::export::csv::{append_csv_rows, csv_header, CsvError};

/// The columns after `freq_hz`, in order.
pub const SWEEP_COLUMNS: [&str; 5] = [
    "passive_db",
    "passive_phase_deg",
    "passive_group_delay_s",
    "active_db",
    "active_phase_deg",
];

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

impl Design {
    /// The sweep table of the passive ideal and of `active` (the active
    /// build's netlist) at `freqs_hz` (finite, at least 0, strictly
    /// ascending), as CSV with the header `freq_hz,` and
    /// [`SWEEP_COLUMNS`]; see [`Design::write_sweep_csv`].
    pub fn sweep_csv(&self, active: &Netlist, freqs_hz: &[f64]) -> Result<String, DesignError> {
        let mut bytes = Vec::new();
        self.write_sweep_csv(active, freqs_hz, &mut bytes)?;
        String::from_utf8(bytes).map_err(|e| self.export(e))
    }

    /// [`Design::sweep_csv`] written to `out` block by block, as `nocoil
    /// sweep` prints it (see the module documentation).
    pub fn write_sweep_csv<W: std::io::Write + ?Sized>(
        &self,
        active: &Netlist,
        freqs_hz: &[f64],
        out: &mut W,
    ) -> Result<(), DesignError> {
        let analysis = |cause| DesignError::Analysis {
            file: self.spec.file.clone(),
            cause,
        };
        // The two solvers are built side by side.
        let (passive, active) = rayon::join(
            || Tracer::new(&self.passive, freqs_hz, true),
            || Tracer::new(active, freqs_hz, false),
        );
        let (passive, active) = (passive.map_err(analysis)?, active.map_err(analysis)?);
        let header = csv_header(&SWEEP_COLUMNS).map_err(|e| self.export(e))?;
        out.write_all(header.as_bytes())
            .map_err(|e| self.export(e))?;
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
            solved
                .into_iter()
                .collect::<Result<(), _>>()
                .map_err(analysis)?;
            for block in &mut blocks {
                unwrap_deg(&mut passive_last, &mut block.columns[1]);
                unwrap_deg(&mut active_last, &mut block.columns[4]);
            }
            let written: Vec<_> = blocks.par_iter_mut().map(|b| b.write(freqs_hz)).collect();
            written
                .into_iter()
                .collect::<Result<(), _>>()
                .map_err(|e| self.export(e))?;
            for block in &blocks {
                out.write_all(block.text.as_bytes())
                    .map_err(|e| self.export(e))?;
            }
        }
        Ok(())
    }

    fn export(&self, cause: impl std::fmt::Display) -> DesignError {
        DesignError::Export {
            file: self.spec.file.clone(),
            cause: cause.to_string(),
        }
    }
}

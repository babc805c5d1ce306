//! The table `nocoil sweep` prints: the passive ideal's gain, phase and
//! exact group delay and the active build's gain and phase over one grid,
//! as CSV, every value finite (see [`crate::analysis::trace`]).

use super::{Design, DesignError};
use crate::analysis::trace;
use crate::circuit::Netlist;
use crate::export::csv::{sweep_csv, write_sweep_csv, CsvError};

/// The columns after `freq_hz`, in order.
pub const SWEEP_COLUMNS: [&str; 5] = [
    "passive_db",
    "passive_phase_deg",
    "passive_group_delay_s",
    "active_db",
    "active_phase_deg",
];

impl Design {
    /// The sweep table of the passive ideal and of `active` (the active
    /// build's netlist) at `freqs_hz` (finite, at least 0, strictly
    /// ascending), as CSV with the header `freq_hz,` and
    /// [`SWEEP_COLUMNS`]. The two traces and the blocks of the table run
    /// on rayon's threads; the text does not depend on their number.
    pub fn sweep_csv(&self, active: &Netlist, freqs_hz: &[f64]) -> Result<String, DesignError> {
        self.sweep_table(active, freqs_hz, |columns| sweep_csv(freqs_hz, columns))
    }

    /// [`Design::sweep_csv`] written to `out` block by block
    /// ([`write_sweep_csv`]), as `nocoil sweep` prints it.
    pub fn write_sweep_csv<W: std::io::Write + ?Sized>(
        &self,
        active: &Netlist,
        freqs_hz: &[f64],
        out: &mut W,
    ) -> Result<(), DesignError> {
        self.sweep_table(active, freqs_hz, |columns| {
            write_sweep_csv(out, freqs_hz, columns)
        })
    }

    /// Traces both networks and hands the named columns to `write`.
    fn sweep_table<T>(
        &self,
        active: &Netlist,
        freqs_hz: &[f64],
        write: impl FnOnce(&[(&str, &[f64])]) -> Result<T, CsvError>,
    ) -> Result<T, DesignError> {
        let file = || self.spec.file.clone();
        // The two networks are independent: one rayon task each.
        let (passive, active) = rayon::join(
            || trace(&self.passive, freqs_hz, true),
            || trace(active, freqs_hz, false),
        );
        let analysis = |cause| DesignError::Analysis {
            file: file(),
            cause,
        };
        let (passive, active) = (passive.map_err(analysis)?, active.map_err(analysis)?);
        let delay = passive.group_delay_s.unwrap_or_default();
        let columns: [&[f64]; 5] = [
            &passive.gain_db,
            &passive.phase_deg,
            &delay,
            &active.gain_db,
            &active.phase_deg,
        ];
        let named: Vec<(&str, &[f64])> = SWEEP_COLUMNS.into_iter().zip(columns).collect();
        write(&named).map_err(|cause| DesignError::Export {
            file: file(),
            cause: cause.to_string(),
        })
    }
}

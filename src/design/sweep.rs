//! The table `nocoil sweep` prints: the passive ideal's gain, phase and
//! exact group delay and the active build's gain and phase over one grid,
//! as CSV, every value finite (see [`crate::analysis::trace`]).

use super::{Design, DesignError};
use crate::analysis::trace;
use crate::circuit::Netlist;
use crate::export::csv::sweep_csv;

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
    /// [`SWEEP_COLUMNS`].
    pub fn sweep_csv(&self, active: &Netlist, freqs_hz: &[f64]) -> Result<String, DesignError> {
        let analysis = |cause| DesignError::Analysis {
            file: self.spec.file.clone(),
            cause,
        };
        let passive = trace(&self.passive, freqs_hz, true).map_err(analysis)?;
        let active = trace(active, freqs_hz, false).map_err(analysis)?;
        let delay = passive.group_delay_s.unwrap_or_default();
        let columns: [&[f64]; 5] = [
            &passive.gain_db,
            &passive.phase_deg,
            &delay,
            &active.gain_db,
            &active.phase_deg,
        ];
        let named: Vec<(&str, &[f64])> = SWEEP_COLUMNS.into_iter().zip(columns).collect();
        sweep_csv(freqs_hz, &named).map_err(|cause| DesignError::Export {
            file: self.spec.file.clone(),
            cause: cause.to_string(),
        })
    }
}

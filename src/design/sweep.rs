//! The table `nocoil sweep` prints: the gain and phase of the three builds
//! and the exact group delay of the passive ideal over one grid, every
//! value finite (see [`crate::analysis::trace`]), as named columns for
//! `crate::export::csv`.

use super::{ActiveDesign, Build, Design, DesignError};
use crate::analysis::trace;

/// The sweep of the three builds: a frequency column and named value
/// columns, in order.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepTable {
    /// The frequencies, Hz.
    pub freq_hz: Vec<f64>,
    /// The value columns: their names (`passive_ideal_gain_db`, ...) and
    /// one value per frequency.
    pub columns: Vec<(String, Vec<f64>)>,
}

impl SweepTable {
    /// The columns as the CSV writer takes them.
    pub fn named(&self) -> Vec<(&str, &[f64])> {
        self.columns
            .iter()
            .map(|(n, v)| (n.as_str(), v.as_slice()))
            .collect()
    }
}

impl Design {
    /// The sweep of the passive ideal (gain, phase, exact group delay) and
    /// of both active builds (gain, phase) at `freqs_hz` (finite, at least
    /// 0, strictly ascending). The three networks are traced on rayon's
    /// threads; the values do not depend on their number.
    pub fn sweep(
        &self,
        active: &ActiveDesign,
        freqs_hz: &[f64],
    ) -> Result<SweepTable, DesignError> {
        let (passive, (exact, parts)) = rayon::join(
            || trace(&self.passive, freqs_hz, true),
            || {
                rayon::join(
                    || trace(&active.build.netlist, freqs_hz, false),
                    || trace(&active.on_parts.netlist, freqs_hz, false),
                )
            },
        );
        let analysis = |cause| self.analysis_error(cause);
        let (passive, exact, parts) = (
            passive.map_err(analysis)?,
            exact.map_err(analysis)?,
            parts.map_err(analysis)?,
        );
        let name =
            |build: Build, what: &str| format!("{}_{what}", build.to_string().replace(' ', "_"));
        let mut columns = vec![
            (name(Build::PassiveIdeal, "gain_db"), passive.gain_db),
            (name(Build::PassiveIdeal, "phase_deg"), passive.phase_deg),
        ];
        if let Some(delay) = passive.group_delay_s {
            columns.push((name(Build::PassiveIdeal, "group_delay_s"), delay));
        }
        for (build, t) in [(Build::ActiveExact, exact), (Build::ActiveOnParts, parts)] {
            columns.push((name(build, "gain_db"), t.gain_db));
            columns.push((name(build, "phase_deg"), t.phase_deg));
        }
        Ok(SweepTable {
            freq_hz: freqs_hz.to_vec(),
            columns,
        })
    }
}

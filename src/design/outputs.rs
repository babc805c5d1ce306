//! The files `nocoil design` writes, computed in memory first so that the
//! binary writes nothing until everything has succeeded.

use super::{ActiveDesign, Design, DesignError};
use crate::export::spice::{deck, AcSweep};

/// Resolution of the `.ac` line in exported decks: fine enough to see
/// every elliptic notch of a 16th-order design on a plot.
pub const DECK_POINTS_PER_DECADE: usize = 100;

/// One output file: its name inside the output folder and its contents.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputFile {
    /// File name, e.g. `passive.cir`.
    pub name: String,
    /// Contents.
    pub bytes: Vec<u8>,
}

impl Design {
    /// Every file of a finished design: the passive and active SPICE decks,
    /// the JSON report, and the documents of
    /// [`Design::document_files`].
    pub fn output_files(&self, active: &ActiveDesign) -> Result<Vec<OutputFile>, DesignError> {
        let (start_hz, stop_hz) = self.default_band();
        let sweep = AcSweep {
            points_per_decade: DECK_POINTS_PER_DECADE,
            start_hz,
            stop_hz,
        };
        let export = |cause| DesignError::Export {
            file: self.spec.file.clone(),
            cause,
        };
        let report = serde_json::to_string_pretty(&self.report_with(active)).map_err(|e| {
            DesignError::Export {
                file: self.spec.file.clone(),
                cause: e.to_string(),
            }
        })?;
        let mut files = vec![
            OutputFile {
                name: "passive.cir".to_string(),
                bytes: deck(&self.passive, &sweep)
                    .map_err(|e| export(e.to_string()))?
                    .into_bytes(),
            },
            OutputFile {
                name: "active.cir".to_string(),
                bytes: deck(&active.build.netlist, &sweep)
                    .map_err(|e| export(e.to_string()))?
                    .into_bytes(),
            },
            OutputFile {
                name: "report.json".to_string(),
                bytes: report.into_bytes(),
            },
        ];
        files.extend(
            self.document_files(active)?
                .into_iter()
                .map(|(name, bytes)| OutputFile { name, bytes }),
        );
        Ok(files)
    }
}

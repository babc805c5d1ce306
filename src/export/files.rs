//! The files of an output set, made in memory first, and written so that
//! a folder never holds half of a set: every file goes into a staging
//! folder inside the output folder, and only when all are written are
//! they moved into place.

use super::bom::{bom_csv, design_rows, BomError};
use super::charts::design_charts;
use super::html::Figure;
use super::page::design_page;
use super::plot::{self, PlotError, PngOutput};
use super::spice::{deck, exported_deck, AcSweep, DeckNoise, SpiceError};
use super::tables::{envelope_csv, noise_csv, sensitivity_csv, step_csv};
use crate::circuit::OpAmpNoise;
use crate::design::{Build, Design, Documents};
use crate::realize::{soldered, PartsSnapError};
use std::io::Write as _;
use std::path::{Path, PathBuf};

/// Resolution of the `.ac` line in exported decks: fine enough to see
/// every elliptic notch of a 16th-order design on a plot.
pub const DECK_POINTS_PER_DECADE: usize = 100;

/// Size of a standalone chart, pixels.
const CHART_SIZE: (u32, u32) = (800, 500);

/// Size of a chart inside the report: two to a printed row stay legible.
const REPORT_CHART_SIZE: (u32, u32) = (640, 400);

/// One output file: its name inside the output folder and its contents.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputFile {
    /// File name, e.g. `passive.cir`.
    pub name: String,
    /// Contents.
    pub bytes: Vec<u8>,
}

/// Why an output could not be rendered (a program fault: the report data
/// comes from the pipeline's own checked stages).
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ExportError {
    /// A SPICE deck.
    #[error("writing a SPICE deck: {0}")]
    Spice(#[from] SpiceError),
    /// A numeric table could not be written.
    #[error("table: {0}")]
    Csv(#[from] super::csv::CsvError),
    /// A chart.
    #[error("drawing a chart: {0}")]
    Plot(#[from] PlotError),
    /// The bill of materials.
    #[error("the bill of materials: {0}")]
    Bom(#[from] BomError),
    /// The report as JSON.
    #[error("the JSON report: {0}")]
    Json(#[from] serde_json::Error),
    /// The build as soldered.
    #[error("the build as soldered: {0}")]
    Soldered(#[from] PartsSnapError),
}

/// The charts (SVG, and PNG where a TrueType font is found), the Monte
/// Carlo envelope, the sensitivities, the bill of materials and the HTML
/// report.
pub fn document_files(d: &Documents) -> Result<Vec<OutputFile>, ExportError> {
    let mut files = Vec::new();
    let mut figures = Vec::new();
    for c in design_charts(d) {
        let svg = plot::svg(&c.chart, CHART_SIZE.0, CHART_SIZE.1)?;
        files.push(file(&format!("{}.svg", c.stem), svg.into_bytes()));
        if let PngOutput::Image { bytes, .. } = plot::png(&c.chart, CHART_SIZE.0, CHART_SIZE.1)? {
            files.push(file(&format!("{}.png", c.stem), bytes));
        }
        figures.push(Figure {
            caption: c.caption.to_string(),
            svg: plot::svg(&c.chart, REPORT_CHART_SIZE.0, REPORT_CHART_SIZE.1)?,
        });
    }
    let bom = design_rows(&d.report, &d.passive_ideal, &d.active_on_parts, &d.stages);
    files.push(file("bom.csv", bom_csv(&bom)?.into_bytes()));
    files.push(file(
        "montecarlo.csv",
        envelope_csv(&d.analyses.montecarlo).into_bytes(),
    ));
    files.push(file(
        "noise.csv",
        noise_csv(&d.analyses.noise)?.into_bytes(),
    ));
    files.push(file("step.csv", step_csv(&d.analyses.step)?.into_bytes()));
    files.push(file(
        "sensitivity.csv",
        sensitivity_csv(Build::ActiveOnParts, &d.analyses.sensitivity).into_bytes(),
    ));
    files.push(file(
        "report.html",
        design_page(d, figures, &bom).into_bytes(),
    ));
    Ok(files)
}

/// Every file of a design: the decks of the three builds (`passive.cir`
/// the passive ideal, `active.cir` the active exact build, `built.cir`
/// the active on parts build as soldered, element for element what
/// `bom.csv` lists), the JSON report and the [`document_files`].
pub fn design_files(d: &Documents) -> Result<Vec<OutputFile>, ExportError> {
    let (start_hz, stop_hz) = d.view_hz;
    let sweep = AcSweep {
        points_per_decade: DECK_POINTS_PER_DECADE,
        start_hz,
        stop_hz,
    };
    let trims = d
        .report
        .active
        .as_ref()
        .map(|a| a.trims.as_slice())
        .unwrap_or_default();
    let mut exact = d.active_exact.clone();
    exact.title = format!("nocoil {}: {}", Build::ActiveExact, d.report.design_file);
    let mut built = soldered(&d.active_on_parts, trims)?;
    built.title = format!(
        "nocoil {} (fixed resistors and trimmers as set): {}",
        Build::ActiveOnParts,
        d.report.design_file
    );
    let noise = DeckNoise {
        opamp: d
            .report
            .active
            .as_ref()
            .map_or(OpAmpNoise::NOISELESS, |a| a.opamp_noise),
        temperature_k: d.analyses.noise.temperature_k,
    };
    let mut files = vec![
        file(
            "passive.cir",
            exported_deck(&d.passive_ideal, &sweep, &noise)?.into_bytes(),
        ),
        file(
            "active.cir",
            exported_deck(&exact, &sweep, &noise)?.into_bytes(),
        ),
        file(
            "built.cir",
            exported_deck(&built, &sweep, &noise)?.into_bytes(),
        ),
        file(
            "report.json",
            serde_json::to_string_pretty(&d.report)?.into_bytes(),
        ),
    ];
    files.extend(document_files(d)?);
    Ok(files)
}

/// The files of a design whose active build was refused: the passive
/// ideal's deck and the report of the passive ideal alone, so a designer
/// still gets the ladder to simulate or build.
pub fn passive_files(d: &Design) -> Result<Vec<OutputFile>, ExportError> {
    let (start_hz, stop_hz) = d.view_hz();
    let sweep = AcSweep {
        points_per_decade: DECK_POINTS_PER_DECADE,
        start_hz,
        stop_hz,
    };
    Ok(vec![
        file("passive.cir", deck(&d.passive, &sweep)?.into_bytes()),
        file(
            "report.json",
            serde_json::to_string_pretty(&d.report())?.into_bytes(),
        ),
    ])
}

fn file(name: &str, bytes: Vec<u8>) -> OutputFile {
    OutputFile {
        name: name.to_string(),
        bytes,
    }
}

/// Why an output folder cannot take an output set (bad input: exit 2).
#[derive(Debug, thiserror::Error)]
#[error("--out {}: cannot write there ({}); give a folder you may create and write", dir.display(), cause)]
pub struct OutDirError {
    /// The folder.
    pub dir: PathBuf,
    /// Why.
    pub cause: std::io::Error,
}

/// Name prefix of the staging folder inside the output folder that a set
/// is written into before its files are moved into place.
pub const STAGING_PREFIX: &str = ".nocoil-staging-";

/// Checks, before anything is computed and without leaving anything
/// behind, that `dir` can take an output set: it is a folder a file can be
/// written in, or it does not exist yet and its nearest existing parent
/// is such a folder (where it will be created). A link that leads nowhere
/// is refused: creating the folder through it would fail only after the
/// computing.
pub fn prepare_out_dir(dir: &Path) -> Result<(), OutDirError> {
    let fail = |cause| OutDirError {
        dir: dir.to_path_buf(),
        cause,
    };
    let absolute = std::path::absolute(dir).map_err(fail)?;
    let mut existing = Path::new("/");
    for p in absolute.ancestors() {
        match (std::fs::symlink_metadata(p), p.exists()) {
            (Ok(_), true) => {
                existing = p;
                break;
            }
            (Ok(_), false) => {
                return Err(fail(std::io::Error::new(
                    std::io::ErrorKind::NotFound,
                    format!("{} is a link to nothing", p.display()),
                )))
            }
            (Err(_), _) => {}
        }
    }
    if !existing.is_dir() {
        return Err(fail(std::io::Error::new(
            std::io::ErrorKind::NotADirectory,
            format!("{} is not a folder", existing.display()),
        )));
    }
    // A probe file, removed when dropped.
    tempfile::NamedTempFile::new_in(existing).map_err(fail)?;
    Ok(())
}

/// Why an output set could not be written; nothing of it was moved into
/// place.
#[derive(Debug, thiserror::Error)]
pub enum SetError {
    /// A name of the set is taken by something that is not a file (a
    /// folder, say): the user's to move (bad input).
    #[error("--out {}: {name} is there and is not a file; move it away or give another folder (nothing of the set was written)", dir.display())]
    NameTaken {
        /// The output folder.
        dir: PathBuf,
        /// The file name of the set.
        name: String,
    },
    /// Writing failed (a full disk, a folder made read-only meanwhile):
    /// the machine's, not the input's.
    #[error("--out {}: writing the output set failed ({cause}); nothing of the set was written", dir.display())]
    Io {
        /// The output folder.
        dir: PathBuf,
        /// Why.
        cause: std::io::Error,
    },
}

impl SetError {
    /// Whether the input is at fault (exit status 2) rather than the
    /// machine (1).
    pub fn is_bad_input(&self) -> bool {
        matches!(self, SetError::NameTaken { .. })
    }
}

/// Writes the set `files` into `dir` whole or not at all: every file into
/// a staging folder inside `dir` first, and only when all are written and
/// synced are they moved (renamed, within one file system) into place. A
/// staging folder left by a run that was killed is removed first. Runs
/// into the same folder take turns, the last one's files winning: each
/// holds an exclusive lock on the folder itself (flock, which Linux allows
/// on a folder) from before it clears stale staging folders until its
/// files are in place, so none removes another's staging folder. A name
/// of the set taken by a folder is found before anything is written.
pub fn write_set(dir: &Path, files: &[OutputFile]) -> Result<(), SetError> {
    let io = |cause| SetError::Io {
        dir: dir.to_path_buf(),
        cause,
    };
    std::fs::create_dir_all(dir).map_err(io)?;
    let lock = std::fs::File::open(dir).map_err(io)?;
    // Released when `lock` is dropped (or the process ends, killed or not).
    lock.lock().map_err(io)?;
    remove_stale_staging(dir).map_err(io)?;
    for f in files {
        let taken = std::fs::symlink_metadata(dir.join(&f.name)).is_ok_and(|m| !m.is_file());
        if taken {
            return Err(SetError::NameTaken {
                dir: dir.to_path_buf(),
                name: f.name.clone(),
            });
        }
    }
    let staging = tempfile::Builder::new()
        .prefix(STAGING_PREFIX)
        .tempdir_in(dir)
        .map_err(io)?;
    for f in files {
        let path = staging.path().join(&f.name);
        let mut file = std::fs::File::create(&path).map_err(io)?;
        file.write_all(&f.bytes).map_err(io)?;
        file.sync_all().map_err(io)?;
    }
    for f in files {
        std::fs::rename(staging.path().join(&f.name), dir.join(&f.name)).map_err(io)?;
    }
    // The staging folder, empty now, is removed when dropped.
    Ok(())
}

/// Removes staging folders of earlier runs that did not finish (under the
/// lock, so none of them belongs to a live run).
fn remove_stale_staging(dir: &Path) -> std::io::Result<()> {
    for entry in std::fs::read_dir(dir)? {
        let entry = entry?;
        let stale = entry
            .file_name()
            .to_string_lossy()
            .starts_with(STAGING_PREFIX)
            && entry.file_type()?.is_dir();
        if stale {
            std::fs::remove_dir_all(entry.path())?;
        }
    }
    Ok(())
}

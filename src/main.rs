//! The `nocoil` command line: glue over the library.
//!
//! `main -> run(resolve(parse()))`: clap reads the raw arguments, one
//! [`resolve`] step turns them into a library [`Request`] (or a
//! [`FlagError`] naming the flag, the value and what is accepted), and
//! each request is one library call whose result is printed or written.
//! Errors print as `nocoil: ` and the chain; the exit status is 2 when the
//! input is at fault and 1 when the program is, decided from the innermost
//! error ([`nocoil::design::DesignError::blame`]).

use clap::{Parser, Subcommand};
use nocoil::design::{self, ActiveDesign, Blame, Build, Design, DesignError};
use nocoil::export::files::{
    design_files, document_files, passive_files, prepare_out_dir, write_set, OutDirError, SetError,
};
use nocoil::export::sweep::{write_sweep_csv, SweepError};
use nocoil::export::{bom, summary, tables};
use nocoil::spec::{Spec, MAX_TRIALS};
use nocoil::transform::{Band, Kind, MaskField, FREQUENCY_RANGE_HZ};
use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Inductorless active filters with the low sensitivity of a doubly
/// terminated LC ladder.
#[derive(Parser)]
#[command(name = "nocoil", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Design the filter a TOML design file describes: print whether the
    /// active on parts build meets the specification, then the three
    /// builds, and write into a folder the decks of the three builds
    /// (passive.cir, active.cir, built.cir), report.json, bom.csv,
    /// sensitivity.csv, montecarlo.csv, noise.csv, step.csv, eight charts
    /// (.svg, and .png where a TrueType font is installed) and
    /// report.html.
    Design {
        /// The design file (TOML).
        spec: PathBuf,
        /// Folder for the outputs (created if missing).
        #[arg(long, value_name = "DIR")]
        out: PathBuf,
    },
    /// Print the response of the passive ideal (gain, phase, exact group
    /// delay) and of the active on parts build (gain, phase) as CSV.
    Sweep {
        /// The design file (TOML).
        spec: PathBuf,
        /// First frequency, Hz (default: a decade below the lowest edge).
        #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
        from: Option<f64>,
        /// Last frequency, Hz (default: a decade above the highest edge).
        #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
        to: Option<f64>,
        /// Number of log-spaced points, both ends included.
        #[arg(long, value_name = "N", default_value_t = 401)]
        points: u64,
    },
    /// Run a Monte Carlo yield analysis of the active on parts build
    /// against the specification: print the yield and the worst boards;
    /// with --out, write the envelope as montecarlo.csv.
    Montecarlo {
        /// The design file (TOML).
        spec: PathBuf,
        /// Number of trials (default: the design file's, else 1000).
        #[arg(long, value_name = "N")]
        trials: Option<u64>,
        /// Seed of the draws (default: the design file's, else 1). One seed
        /// gives one result, whatever the thread count.
        #[arg(long, value_name = "S")]
        seed: Option<u64>,
        /// Worker threads (default: one per core).
        #[arg(long, value_name = "N")]
        threads: Option<u64>,
        /// Folder for montecarlo.csv (the envelope).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
    },
    /// Print the bill of materials of the passive ideal and the active on
    /// parts build as CSV (each trim as its fixed resistor and trimmer).
    Bom {
        /// The design file (TOML).
        spec: PathBuf,
    },
    /// Print the sensitivities of the active on parts build as CSV (dB
    /// per % of every part and op-amp GBW).
    Sensitivity {
        /// The design file (TOML).
        spec: PathBuf,
    },
    /// Print the peak gain to every op-amp output of the active on parts
    /// build and the input level the output swing allows, as CSV.
    Levels {
        /// The design file (TOML).
        spec: PathBuf,
    },
    /// Print the output noise of the three builds integrated over the
    /// passband (or the design file's [noise] band), the largest sources
    /// and the dynamic range of the active on parts build; with --csv,
    /// the noise densities as CSV instead.
    Noise {
        /// The design file (TOML).
        spec: PathBuf,
        /// Print the densities over frequency as CSV (noise.csv).
        #[arg(long)]
        csv: bool,
    },
    /// Print the step response of the three builds: overshoot, rise time
    /// and settling times (and to half an LSB with [adc] bits); with
    /// --csv, the responses over time as CSV instead.
    Step {
        /// The design file (TOML).
        spec: PathBuf,
        /// Print the responses over time as CSV (step.csv).
        #[arg(long)]
        csv: bool,
    },
    /// Write the charts, sensitivity.csv, montecarlo.csv, noise.csv,
    /// step.csv, bom.csv and report.html into a folder (no decks, no
    /// JSON).
    Report {
        /// The design file (TOML).
        spec: PathBuf,
        /// Folder for the documents (created if missing).
        #[arg(long, value_name = "DIR")]
        out: PathBuf,
    },
    /// Print the minimum order of every family for a mask given by flags.
    Order {
        /// Filter kind.
        #[arg(long, value_name = "KIND")]
        kind: String,
        /// Passband edge, Hz: one frequency, or low,high for band kinds.
        #[arg(long, value_name = "HZ[,HZ]", value_delimiter = ',', required = true)]
        passband: Vec<f64>,
        /// Stopband edge, Hz: one frequency, or low,high for band kinds.
        #[arg(long, value_name = "HZ[,HZ]", value_delimiter = ',', required = true)]
        stopband: Vec<f64>,
        /// Largest loss allowed across the passband, dB (the ripple; for
        /// the monotonic families the loss at the passband edge).
        #[arg(long, value_name = "DB")]
        ripple: f64,
        /// Minimum stopband attenuation, dB.
        #[arg(long, value_name = "DB")]
        attenuation: f64,
    },
}

/// Most points a sweep prints: a million rows of CSV (about 100 MB) is
/// more than any plot or spreadsheet uses.
const MAX_SWEEP_POINTS: u64 = 1_000_000;

/// Most worker threads: far beyond the cores of any workstation; more
/// only adds start-up time and memory.
const MAX_THREADS: u64 = 1024;

/// What the command line asks the library for, every value checked.
enum Request {
    Design {
        spec: PathBuf,
        out: PathBuf,
    },
    Sweep {
        spec: PathBuf,
        from: Option<f64>,
        to: Option<f64>,
        points: usize,
    },
    MonteCarlo {
        spec: PathBuf,
        trials: Option<usize>,
        seed: Option<u64>,
        threads: Option<usize>,
        out: Option<PathBuf>,
    },
    Table {
        spec: PathBuf,
        table: Table,
    },
    Report {
        spec: PathBuf,
        out: PathBuf,
    },
    Order {
        band: Band,
        ripple_db: f64,
        attenuation_db: f64,
    },
}

/// The single tables a command prints (as CSV, or as text where `csv`
/// is false).
enum Table {
    Bom,
    Sensitivity,
    Levels,
    Noise { csv: bool },
    Step { csv: bool },
}

/// A flag whose value is not accepted: exit status 2.
#[derive(Debug, thiserror::Error)]
#[error("{flag} {value}: {expected}")]
struct FlagError {
    flag: &'static str,
    value: String,
    expected: String,
}

fn flag_error(flag: &'static str, value: impl ToString, expected: impl Into<String>) -> FlagError {
    FlagError {
        flag,
        value: value.to_string(),
        expected: expected.into(),
    }
}

/// A count from `lowest` to `highest`, or the flag's error.
fn count(flag: &'static str, n: u64, lowest: u64, highest: u64) -> Result<usize, FlagError> {
    if (lowest..=highest).contains(&n) {
        usize::try_from(n).map_err(|_| flag_error(flag, n, "expected a smaller number"))
    } else {
        Err(flag_error(
            flag,
            n,
            format!("expected a whole number from {lowest} to {highest}"),
        ))
    }
}

/// The frequencies a sweep may reach, Hz: three decades beyond the edges
/// a design may name on either side (`FREQUENCY_RANGE_HZ`), more than any
/// view needs; far beyond, the network's equations no longer hold in a
/// double (the generative test found a singular system at 1e55 Hz).
const SWEEP_RANGE_HZ: (f64, f64) = (1e-6, 1e11);

/// A number as typed, in the shorter of its plain and exponent forms:
/// 1000 rather than 1000.0, 1e308 rather than its 309 digits.
fn shortest(v: f64) -> String {
    let (plain, exponent) = (v.to_string(), format!("{v:?}"));
    if exponent.len() < plain.len() {
        exponent
    } else {
        plain
    }
}

/// A frequency flag within [`SWEEP_RANGE_HZ`].
fn frequency(flag: &'static str, f: Option<f64>) -> Result<Option<f64>, FlagError> {
    let (lo, hi) = SWEEP_RANGE_HZ;
    match f {
        Some(f) if !(lo..=hi).contains(&f) => Err(flag_error(
            flag,
            shortest(f),
            format!("expected a frequency in Hz greater than 0, from {lo:e} to {hi:e}"),
        )),
        f => Ok(f),
    }
}

/// Turns the raw arguments into a library request.
fn resolve(cli: Cli) -> Result<Request, FlagError> {
    Ok(match cli.command {
        Command::Design { spec, out } => Request::Design { spec, out },
        Command::Sweep {
            spec,
            from,
            to,
            points,
        } => {
            let (from, to) = (frequency("--from", from)?, frequency("--to", to)?);
            if let (Some(a), Some(b)) = (from, to) {
                if a >= b {
                    return Err(flag_error(
                        "--to",
                        b,
                        format!("expected a frequency above --from {a} Hz"),
                    ));
                }
            }
            Request::Sweep {
                spec,
                from,
                to,
                points: count("--points", points, 2, MAX_SWEEP_POINTS)?,
            }
        }
        Command::Montecarlo {
            spec,
            trials,
            seed,
            threads,
            out,
        } => Request::MonteCarlo {
            spec,
            trials: trials
                .map(|n| count("--trials", n, 1, MAX_TRIALS as u64))
                .transpose()?,
            seed,
            threads: threads
                .map(|n| count("--threads", n, 1, MAX_THREADS))
                .transpose()?,
            out,
        },
        Command::Bom { spec } => Request::Table {
            spec,
            table: Table::Bom,
        },
        Command::Sensitivity { spec } => Request::Table {
            spec,
            table: Table::Sensitivity,
        },
        Command::Levels { spec } => Request::Table {
            spec,
            table: Table::Levels,
        },
        Command::Noise { spec, csv } => Request::Table {
            spec,
            table: Table::Noise { csv },
        },
        Command::Step { spec, csv } => Request::Table {
            spec,
            table: Table::Step { csv },
        },
        Command::Report { spec, out } => Request::Report { spec, out },
        Command::Order {
            kind,
            passband,
            stopband,
            ripple,
            attenuation,
        } => {
            let kind: Kind = serde_json::from_value(serde_json::Value::String(kind.clone()))
                .map_err(|_| {
                    flag_error(
                        "--kind",
                        &kind,
                        "expected lowpass, highpass, bandpass or bandstop",
                    )
                })?;
            let band = design::mask_band(kind, &passband, &stopband, ripple, attenuation).map_err(
                |p| {
                    let flag = match p.field {
                        MaskField::Passband => "--passband",
                        MaskField::Stopband => "--stopband",
                        MaskField::Ripple => "--ripple",
                        MaskField::Attenuation => "--attenuation",
                    };
                    let edges =
                        |v: &[f64]| v.iter().map(|f| shortest(*f)).collect::<Vec<_>>().join(",");
                    let (lo, hi) = FREQUENCY_RANGE_HZ;
                    let shape = match kind.is_band() {
                        true => format!(
                            "expected low,high in Hz with {lo:e} <= low < high <= {hi:e}, for a {kind}"
                        ),
                        false => format!(
                            "expected one frequency in Hz from {lo:e} to {hi:e}, for a {kind}"
                        ),
                    };
                    match p.field {
                        MaskField::Passband => flag_error(flag, edges(&passband), shape),
                        MaskField::Stopband if stopband.len() != passband.len() => {
                            flag_error(flag, edges(&stopband), shape)
                        }
                        MaskField::Stopband => flag_error(flag, edges(&stopband), p.expected),
                        _ => flag_error(flag, p.got, p.expected),
                    }
                },
            )?;
            Request::Order {
                band,
                ripple_db: ripple,
                attenuation_db: attenuation,
            }
        }
    })
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        // --help and --version print and succeed.
        Err(e) if !e.use_stderr() => {
            let _ = e.print();
            return ExitCode::SUCCESS;
        }
        // A malformed command line is bad input, told in one line like
        // every other (clap's own message, without its usage block).
        Err(e) => {
            let text = e.render().to_string();
            let first = text.lines().next().unwrap_or_default();
            eprintln!(
                "nocoil: {}; nocoil --help lists the commands and flags",
                first.trim_start_matches("error: ")
            );
            return ExitCode::from(2);
        }
    };
    let result = resolve(cli).map_err(anyhow::Error::from).and_then(run);
    match result {
        Ok(()) => ExitCode::SUCCESS,
        // A closed pipe (`nocoil sweep ... | head`) ends the program
        // quietly, as command-line tools do.
        Err(e) if is_broken_pipe(&e) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("nocoil: {e:#}");
            ExitCode::from(if is_bad_input(&e) { 2 } else { 1 })
        }
    }
}

/// Whether an error is the user's input: a flag, an output folder, or a
/// design whose innermost error blames the input.
fn is_bad_input(e: &anyhow::Error) -> bool {
    e.downcast_ref::<FlagError>().is_some()
        || e.downcast_ref::<OutDirError>().is_some()
        || e.downcast_ref::<SetError>()
            .is_some_and(SetError::is_bad_input)
        || e.downcast_ref::<DesignError>()
            .is_some_and(|d| d.blame() == Blame::Input)
}

fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.downcast_ref::<std::io::Error>()
        .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
}

/// Prints `text` to standard output in one write.
fn emit(text: &str) -> anyhow::Result<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())?;
    out.flush()?;
    Ok(())
}

/// The design and its active builds (by a design for yield's search when
/// the file has a `[yield]` table), with a progress display on a terminal
/// while they are computed (a high-order band filter takes seconds, a
/// search more).
fn load_active(spec: &Path) -> Result<(Design, ActiveDesign), DesignError> {
    build_design(&Spec::load(spec)?, &Progress::new())
}

/// [`design::design_for_yield`], its candidates counted on `progress`.
fn build_design(spec: &Spec, progress: &Progress) -> Result<(Design, ActiveDesign), DesignError> {
    progress.stage("building the active builds");
    let candidate = |tried: usize, most: usize| progress.candidates(tried, most);
    let built = design::design_for_yield(spec, Some(&candidate));
    progress.done();
    built
}

fn run(request: Request) -> anyhow::Result<()> {
    match request {
        Request::Design { spec, out } => {
            prepare_out_dir(&out)?;
            let spec = Spec::load(&spec).map_err(DesignError::from)?;
            let progress = Progress::new();
            let (d, active) = match build_design(&spec, &progress) {
                Ok(built) => built,
                // A refused active build still leaves the passive ideal
                // (a refused passive ideal is refused again here).
                Err(refusal) if refusal.blame() == Blame::Input => {
                    let d = design::design(&spec)?;
                    let written = write_files(&out, &passive_files(&d)?)?;
                    emit(&summary::passive_summary(&d.report(), &refusal.to_string()))?;
                    emit(&written)?;
                    return Err(refusal.into());
                }
                Err(fault) => return Err(fault.into()),
            };
            let docs = d.documents(&active, progress.analyses(&d, &active)?);
            // The set is written before anything is printed, so a reader
            // that closes standard output early still gets it whole.
            let written = write_files(&out, &design_files(&docs)?)?;
            emit(&summary::summary(&docs))?;
            emit(&written)
        }
        Request::Report { spec, out } => {
            prepare_out_dir(&out)?;
            let (d, active) = load_active(&spec)?;
            let progress = Progress::new();
            let docs = d.documents(&active, progress.analyses(&d, &active)?);
            emit(&write_files(&out, &document_files(&docs)?)?)
        }
        Request::Sweep {
            spec,
            from,
            to,
            points,
        } => {
            let (d, active) = load_active(&spec)?;
            let (lo, hi) = d.view_hz();
            let (from, to) = (from.unwrap_or(lo), to.unwrap_or(hi));
            let grid = nocoil::circuit::log_grid(from, to, points).map_err(|_| {
                flag_error(
                    "--from",
                    format!("{from} --to {to}"),
                    "expected 0 < from < to, in Hz",
                )
            })?;
            let mut out = std::io::stdout().lock();
            // Streamed block by block: a long table is never held whole.
            write_sweep_csv(&d.passive, &active.on_parts.netlist, &grid, &mut out).map_err(
                |e| match e {
                    SweepError::Io(io) => anyhow::Error::from(io),
                    other => other.into(),
                },
            )?;
            Ok(out.flush()?)
        }
        Request::MonteCarlo {
            spec,
            trials,
            seed,
            threads,
            out,
        } => {
            if let Some(dir) = &out {
                prepare_out_dir(dir)?;
            }
            let (d, active) = load_active(&spec)?;
            let progress = Progress::new();
            let shortened_for = match trials {
                Some(_) => None,
                None => d.trials_shortened_for(&active),
            };
            let trials = trials.unwrap_or(d.trials(&active));
            let seed = seed.unwrap_or(d.spec.montecarlo.seed);
            let mut pool = rayon::ThreadPoolBuilder::new();
            if let Some(n) = threads {
                pool = pool.num_threads(n);
            }
            let pool = pool.build()?;
            progress.trials(trials);
            let tick = |_done: usize| progress.tick();
            let started = std::time::Instant::now();
            let result =
                pool.install(|| d.monte_carlo(&active, true, trials, seed, Some(&tick)))?;
            progress.done();
            eprintln!(
                "nocoil: {trials} trials in {:.3} s on {} threads",
                started.elapsed().as_secs_f64(),
                pool.current_num_threads()
            );
            let written = match out {
                Some(dir) => write_files(
                    &dir,
                    &[nocoil::export::files::OutputFile {
                        name: "montecarlo.csv".to_string(),
                        bytes: tables::envelope_csv(&result).into_bytes(),
                    }],
                )?,
                None => String::new(),
            };
            let level_db = d.report().passband_level_db;
            emit(&tables::yield_summary(
                &result,
                seed,
                shortened_for,
                level_db,
                active.on_parts.has_readings(),
            ))?;
            emit(&written)
        }
        Request::Table { spec, table } => {
            let (d, active) = load_active(&spec)?;
            let parts = &active.on_parts;
            emit(&match table {
                Table::Bom => bom::bom_csv(&bom::design_rows(
                    &d.report_with(&active),
                    &d.passive,
                    &parts.netlist,
                    &parts.stages,
                ))?,
                Table::Sensitivity => {
                    tables::sensitivity_csv(Build::ActiveOnParts, &d.sensitivity(&parts.netlist)?)
                }
                Table::Levels => {
                    tables::levels_csv(Build::ActiveOnParts, &active.on_parts_figures.levels)
                }
                Table::Noise { csv: true } => tables::noise_csv(&d.noise_figures(&active)?)?,
                Table::Noise { csv: false } => summary::noise_text(&d.noise_figures(&active)?),
                Table::Step { csv: true } => tables::step_csv(&d.step_report(&active)?)?,
                Table::Step { csv: false } => {
                    summary::step_text(&d.step_report(&active)?, Some(active.build.method_used))
                }
            })
        }
        Request::Order {
            band,
            ripple_db,
            attenuation_db,
        } => emit(&tables::order_text(&design::order_table(
            &band,
            ripple_db,
            attenuation_db,
        ))),
    }
}

/// Progress on standard error, drawn only on a terminal, so that standard
/// output (and a log of standard error) is the same for one seed on any
/// machine: a spinner naming the stage, then the Monte Carlo's trials
/// with the time left.
struct Progress(indicatif::ProgressBar);

impl Progress {
    fn new() -> Progress {
        let bar = indicatif::ProgressBar::new_spinner();
        if !std::io::IsTerminal::is_terminal(&std::io::stderr()) {
            bar.set_draw_target(indicatif::ProgressDrawTarget::hidden());
        }
        Progress(bar)
    }

    /// Names the stage being computed.
    fn stage(&self, what: &'static str) {
        self.0.set_message(what);
        self.0
            .enable_steady_tick(std::time::Duration::from_millis(120));
    }

    /// Counts `trials` Monte Carlo trials from here on.
    fn trials(&self, trials: usize) {
        if let Ok(style) = indicatif::ProgressStyle::with_template(
            "{msg} [{elapsed_precise}] {wide_bar} {pos}/{len} trials, {eta} left",
        ) {
            self.0.set_style(style);
        }
        self.0.set_message("Monte Carlo");
        self.0.set_length(trials as u64);
        self.0.set_position(0);
    }

    /// A design for yield's search has tried `tried` of at most `most`
    /// candidates.
    fn candidates(&self, tried: usize, most: usize) {
        if let Ok(style) = indicatif::ProgressStyle::with_template(
            "{msg} [{elapsed_precise}] {wide_bar} {pos}/{len} candidates",
        ) {
            self.0.set_style(style);
        }
        self.0.set_message("design for yield");
        self.0.set_length(most as u64);
        self.0.set_position(tried as u64);
    }

    /// One more trial done.
    fn tick(&self) {
        self.0.inc(1);
    }

    /// The analyses of a design, the Monte Carlo's trials counted.
    fn analyses(&self, d: &Design, active: &ActiveDesign) -> Result<design::Analyses, DesignError> {
        self.trials(d.trials(active) * d.monte_carlo_runs(active));
        let tick = |_done: usize| self.tick();
        let analyses = d.analyses(active, Some(&tick));
        self.done();
        analyses
    }

    /// Clears the display.
    fn done(&self) {
        self.0.finish_and_clear();
    }
}

impl Drop for Progress {
    /// An error ends the program with the display cleared, not frozen.
    fn drop(&mut self) {
        self.0.finish_and_clear();
    }
}

/// Writes an output set whole; returns the line that says where.
fn write_files(out: &Path, files: &[nocoil::export::files::OutputFile]) -> anyhow::Result<String> {
    write_set(out, files)?;
    let names: Vec<&str> = files.iter().map(|f| f.name.as_str()).collect();
    Ok(format!(
        "wrote into {}: {}\n",
        out.display(),
        names.join(", ")
    ))
}

//! The `nocoil` command line: glue over the library.
//!
//! `main -> run(parse()) -> Result`; errors print as `nocoil: ` and the
//! chain, with exit status 2 for bad input and 1 for anything else.

use anyhow::Context;
use clap::{Parser, Subcommand, ValueEnum};
use nocoil::approx::{min_order, Family};
use nocoil::circuit::log_grid;
use nocoil::design::{self, Design, DesignError};
use nocoil::export;
use nocoil::spec::mask::{check_edge, check_levels, check_sides, MaskField, MaskProblem};
use nocoil::spec::{Edge, Kind, Spec};
use nocoil::synth::ELLIPTIC_MAX_ORDER;
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
    /// Design the filter a TOML design file describes: print a summary and
    /// write the SPICE netlist and the JSON report into a folder.
    Design {
        /// The design file (TOML).
        spec: PathBuf,
        /// Folder for the outputs (created if missing).
        #[arg(long, value_name = "DIR")]
        out: PathBuf,
    },
    /// Print the frequency response of the passive ideal (gain, phase,
    /// group delay) and of the active build (gain, phase) as CSV.
    Sweep {
        /// The design file (TOML).
        spec: PathBuf,
        /// First frequency, Hz (default: a decade below the lowest edge).
        #[arg(long, value_name = "HZ")]
        from: Option<f64>,
        /// Last frequency, Hz (default: a decade above the highest edge).
        #[arg(long, value_name = "HZ")]
        to: Option<f64>,
        /// Number of log-spaced points, both ends included.
        #[arg(long, value_name = "N", default_value_t = 401)]
        points: usize,
    },
    /// Run a Monte Carlo yield analysis of the active build on preferred
    /// values, trimmed, against the specification: print the yield and the worst trials; with --out,
    /// write the envelope as CSV.
    Montecarlo {
        /// The design file (TOML).
        spec: PathBuf,
        /// Number of trials (default: the design file's, else 1000).
        #[arg(long, value_name = "N")]
        trials: Option<usize>,
        /// Seed of the draws (default: the design file's, else 1). One seed
        /// gives one result, whatever the thread count.
        #[arg(long, value_name = "S")]
        seed: Option<u64>,
        /// Worker threads (default: one per core).
        #[arg(long, value_name = "N")]
        threads: Option<usize>,
        /// Folder for montecarlo.csv (the envelope).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
    },
    /// Print the bill of materials of both builds as CSV.
    Bom {
        /// The design file (TOML).
        spec: PathBuf,
    },
    /// Print the sensitivities of the active build as CSV (dB per % of
    /// every part and op-amp GBW).
    Sensitivity {
        /// The design file (TOML).
        spec: PathBuf,
    },
    /// Print the peak gain to every op-amp output and the input level the
    /// output swing allows, as CSV.
    Levels {
        /// The design file (TOML).
        spec: PathBuf,
    },
    /// Write the charts, the tables and report.html into a folder.
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
        #[arg(long, value_enum)]
        kind: KindArg,
        /// Passband edge, Hz; two values (low,high) for band kinds.
        #[arg(long, value_name = "HZ", value_delimiter = ',', required = true)]
        passband: Vec<f64>,
        /// Stopband edge, Hz; two values (low,high) for band kinds.
        #[arg(long, value_name = "HZ", value_delimiter = ',', required = true)]
        stopband: Vec<f64>,
        /// Largest loss allowed across the passband, dB (the ripple; for
        /// Butterworth the loss at the passband edge).
        #[arg(long, value_name = "DB")]
        ripple: f64,
        /// Minimum stopband attenuation, dB.
        #[arg(long, value_name = "DB")]
        attenuation: f64,
    },
}

#[derive(Clone, Copy, ValueEnum)]
enum KindArg {
    Lowpass,
    Highpass,
    Bandpass,
    Bandstop,
}

impl From<KindArg> for Kind {
    fn from(k: KindArg) -> Kind {
        match k {
            KindArg::Lowpass => Kind::Lowpass,
            KindArg::Highpass => Kind::Highpass,
            KindArg::Bandpass => Kind::Bandpass,
            KindArg::Bandstop => Kind::Bandstop,
        }
    }
}

/// An error the user caused: exit status 2.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
struct BadInput(String);

fn main() -> ExitCode {
    match run(Cli::parse()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("nocoil: {e:#}");
            let bad_input = e.downcast_ref::<BadInput>().is_some()
                || e.downcast_ref::<DesignError>()
                    .is_some_and(DesignError::is_bad_input);
            ExitCode::from(if bad_input { 2 } else { 1 })
        }
    }
}

fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Design { spec, out } => run_design(&spec, &out),
        Command::Sweep {
            spec,
            from,
            to,
            points,
        } => run_sweep(&spec, from, to, points),
        Command::Montecarlo {
            spec,
            trials,
            seed,
            threads,
            out,
        } => run_montecarlo(&spec, trials, seed, threads, out.as_deref()),
        Command::Bom { spec } => {
            let (d, active) = load_active(&spec)?;
            print!("{}", export::bom::bom_csv(&d.bom_rows(&active))?);
            Ok(())
        }
        Command::Sensitivity { spec } => {
            let (d, active) = load_active(&spec)?;
            print!("{}", design::sensitivity_csv(&d.sensitivity(&active)?));
            Ok(())
        }
        Command::Levels { spec } => {
            let (d, active) = load_active(&spec)?;
            let (lo, hi) = d.default_band();
            let (levels, _) = d.levels(&active, &log_grid(lo, hi, LEVEL_POINTS)?)?;
            print!("{}", design::levels_csv(&levels));
            Ok(())
        }
        Command::Report { spec, out } => {
            let (d, active) = load_active(&spec)?;
            let files: Vec<design::OutputFile> = d
                .document_files(&active)?
                .into_iter()
                .map(|(name, bytes)| design::OutputFile { name, bytes })
                .collect();
            write_all(&out, &files)
        }
        Command::Order {
            kind,
            passband,
            stopband,
            ripple,
            attenuation,
        } => run_order(kind.into(), &passband, &stopband, ripple, attenuation),
    }
}

fn load_design(spec: &Path) -> anyhow::Result<Design> {
    let spec = Spec::load(spec).map_err(DesignError::from)?;
    Ok(design::design(&spec)?)
}

/// Points of the grid the op-amp levels are searched on.
const LEVEL_POINTS: usize = 400;

fn load_active(spec: &Path) -> anyhow::Result<(Design, design::ActiveDesign)> {
    let d = load_design(spec)?;
    let active = d.active()?;
    Ok((d, active))
}

/// Writes computed files into `out`. Everything is computed before the
/// folder is touched, and each file is written to a temporary name and
/// renamed, so a failure leaves no half-written output.
fn write_all(out: &Path, files: &[design::OutputFile]) -> anyhow::Result<()> {
    std::fs::create_dir_all(out).with_context(|| format!("creating {}", out.display()))?;
    for f in files {
        let path = out.join(&f.name);
        export::write_atomic(&path, &f.bytes)
            .with_context(|| format!("writing {}", path.display()))?;
    }
    let names: Vec<&str> = files.iter().map(|f| f.name.as_str()).collect();
    println!("wrote into {}: {}", out.display(), names.join(", "));
    Ok(())
}

fn run_design(spec: &Path, out: &Path) -> anyhow::Result<()> {
    let (d, active) = load_active(spec)?;
    let files = d.output_files(&active)?;
    print!("{}{}", d.summary(), active.summary());
    write_all(out, &files)
}

fn run_montecarlo(
    spec: &Path,
    trials: Option<usize>,
    seed: Option<u64>,
    threads: Option<usize>,
    out: Option<&Path>,
) -> anyhow::Result<()> {
    let d = load_design(spec)?;
    let trials = trials.unwrap_or(d.spec.montecarlo.trials);
    if trials == 0 {
        return Err(BadInput("--trials 0: expected at least 1".to_string()).into());
    }
    let seed = seed.unwrap_or(d.spec.montecarlo.seed);
    let active = d.active()?;
    let mut pool = rayon::ThreadPoolBuilder::new();
    if let Some(n) = threads {
        if n == 0 {
            return Err(BadInput("--threads 0: expected at least 1".to_string()).into());
        }
        pool = pool.num_threads(n);
    }
    let pool = pool.build().context("starting the worker threads")?;
    // Progress and timing go to standard error, and only on a terminal,
    // so that standard output is the same for one seed on any thread count.
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(trials as u64),
        indicatif::ProgressDrawTarget::stderr(),
    );
    if !std::io::IsTerminal::is_terminal(&std::io::stderr()) {
        bar.set_draw_target(indicatif::ProgressDrawTarget::hidden());
    }
    let tick = |_done: usize| bar.inc(1);
    let started = std::time::Instant::now();
    let result = pool.install(|| d.monte_carlo(&active.real.netlist, trials, seed, Some(&tick)))?;
    bar.finish_and_clear();
    eprintln!(
        "nocoil: {trials} trials in {:.3} s on {} threads",
        started.elapsed().as_secs_f64(),
        pool.current_num_threads()
    );
    print!("{}", design::yield_summary(&result, seed));
    if let Some(dir) = out {
        std::fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))?;
        let path = dir.join("montecarlo.csv");
        export::write_atomic(&path, design::envelope_csv(&result).as_bytes())?;
        println!("wrote {}", path.display());
    }
    Ok(())
}

fn run_sweep(spec: &Path, from: Option<f64>, to: Option<f64>, points: usize) -> anyhow::Result<()> {
    let d = load_design(spec)?;
    let (lo, hi) = d.default_band();
    let (from, to) = (from.unwrap_or(lo), to.unwrap_or(hi));
    let positive = |f: f64| f.is_finite() && f > 0.0;
    if !(positive(from) && positive(to) && from < to) {
        return Err(BadInput(format!(
            "--from {from} --to {to}: expected 0 < from < to, in Hz"
        ))
        .into());
    }
    if points < 2 {
        return Err(BadInput(format!("--points {points}: expected at least 2")).into());
    }
    let freqs = log_grid(from, to, points)?;
    let active = d.active()?;
    // Blocks of the table straight to the locked standard output.
    let mut stdout = std::io::stdout().lock();
    d.write_sweep_csv(&active.build.netlist, &freqs, &mut stdout)?;
    std::io::Write::flush(&mut stdout).context("writing the sweep to standard output")
}

fn run_order(
    kind: Kind,
    passband: &[f64],
    stopband: &[f64],
    ripple: f64,
    attenuation: f64,
) -> anyhow::Result<()> {
    let flag = |p: MaskProblem| {
        let name = match p.field {
            MaskField::Passband => "--passband",
            MaskField::Stopband => "--stopband",
            MaskField::Ripple => "--ripple",
            MaskField::Attenuation => "--attenuation",
        };
        BadInput(format!("{name} {}: {}", p.got, p.expected))
    };
    let edge = |field: MaskField, v: &[f64]| {
        let e = match *v {
            [f] => Edge::Single(f),
            [a, b] => Edge::Pair(a, b),
            _ => Edge::Single(f64::NAN),
        };
        check_edge(field, kind, e).map_err(flag)
    };
    let pass = edge(MaskField::Passband, passband)?;
    let stop = edge(MaskField::Stopband, stopband)?;
    check_sides(kind, pass, stop).map_err(flag)?;
    check_levels(ripple, Some(attenuation)).map_err(flag)?;
    let ws = design::normalized_stopband(design::mapping(kind, pass), stop);
    println!("minimum order (normalized stopband edge {ws:.6})");
    for family in [Family::Butterworth, Family::Chebyshev, Family::Elliptic] {
        let name = format!("{family:?}").to_lowercase();
        match min_order(family, ws, ripple, attenuation) {
            Ok(n) if family == Family::Elliptic && n > ELLIPTIC_MAX_ORDER => {
                println!("  {name:<12} {n} (above the synthesis limit {ELLIPTIC_MAX_ORDER}: relax the mask)")
            }
            Ok(n) => println!("  {name:<12} {n}"),
            Err(e) => println!("  {name:<12} - ({e})"),
        }
    }
    Ok(())
}

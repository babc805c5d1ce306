//! Generative test of the command line, as a hostile user would try it:
//! design files drawn from the design-file grammar (every key, values
//! ordinary and extreme), mutations of the shipped examples, raw garbage,
//! and flags of every subcommand. Every run is classified:
//!
//! - exit 0, with every file it says it wrote present, no staging folder
//!   left, and no NaN or infinity in anything printed or written;
//! - exit 2, with one line on standard error that names the design file
//!   (or the flag) at fault;
//!
//! anything else (exit 1 on input, a panic, a signal, over [`HANG_S`]) is
//! a failure, reported with the smallest input that still fails the same
//! way (lines of the design file removed one by one, flags dropped).
//!
//! `fuzz_command_line` runs [`CI_CASES`] cases in every test run;
//! `cargo test --release -- --ignored fuzz_long` runs on: the environment
//! variables `NOCOIL_FUZZ_CASES` (default 200,000), `NOCOIL_FUZZ_SECONDS`
//! (default 3,600) and `NOCOIL_FUZZ_SEED` (default 1) bound and seed it;
//! `NOCOIL_FUZZ_FIRST` starts at another case index (each case is drawn
//! from its own stream, so one index always gives the same case), and
//! `NOCOIL_FUZZ_SHOW` prints each case before it runs.

use rand_chacha::rand_core::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::path::Path;
use std::process::{Command, Stdio};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// Cases of the run in every test run: a few hundred, kept to about a
/// minute on the project's two cores.
const CI_CASES: usize = 240;

/// A run taking longer than this is a hang (the hardening issue's bound).
const HANG_S: u64 = 10;

/// The same for a design file with a `[yield]` table, whose search draws
/// a Monte Carlo per candidate (the design-for-yield issue's bound).
const SEARCH_HANG_S: u64 = 20;

/// The binary under test.
fn binary() -> &'static str {
    env!("CARGO_BIN_EXE_nocoil")
}

/// The shipped examples, read once.
fn examples() -> Vec<String> {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("examples");
    let mut texts: Vec<String> = std::fs::read_dir(dir)
        .expect("examples folder")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .map(|p| std::fs::read_to_string(p).expect("example"))
        .collect();
    texts.sort();
    texts
}

/// One generated case: a design file, maybe a prototype table beside it,
/// and the arguments (`SPEC`, `TABLE` and `OUT` stand for their paths).
#[derive(Debug, Clone)]
struct Case {
    spec: String,
    table: Option<String>,
    args: Vec<String>,
}

/// How a run ended.
#[derive(Debug, Clone, PartialEq)]
enum Outcome {
    /// Exit 0 or 2 as the contract says.
    Fine,
    /// Anything else, with what was seen.
    Broken(String),
}

struct Gen {
    rng: ChaCha8Rng,
    examples: Vec<String>,
    /// Whether a mutated example's Monte Carlo is shortened to 50 trials
    /// and given orders stop at 8: in every test run, where the cases
    /// share two cores with the rest of the suite, so that the hang bound
    /// measures the program and not the load (the long run keeps the
    /// examples' own 1,000 trials and orders to 12).
    short: bool,
}

impl Gen {
    fn below(&mut self, n: usize) -> usize {
        (self.rng.next_u64() % n as u64) as usize
    }
    fn chance(&mut self, percent: usize) -> bool {
        self.below(100) < percent
    }
    fn pick<'a>(&mut self, items: &[&'a str]) -> &'a str {
        items[self.below(items.len())]
    }
    /// With `percent` % chance, the line `key = <number>` (see
    /// [`Gen::number`]) into `s`.
    fn maybe_key(&mut self, s: &mut String, percent: usize, key: &str, ordinary: (f64, f64)) {
        if self.chance(percent) {
            *s += &format!("{key} = {}\n", self.number(ordinary));
        }
    }
    /// A number as TOML writes it: mostly ordinary, sometimes extreme.
    fn number(&mut self, ordinary: (f64, f64)) -> String {
        const EXTREME: &[&str] = &[
            "0",
            "0.0",
            "-1.0",
            "-0.0",
            "5e-324",
            "1e-300",
            "1e-12",
            "1e12",
            "1e300",
            "1.7976931348623157e308",
            "inf",
            "-inf",
            "nan",
            "1",
            "2",
            "3",
            "\"ten\"",
            "true",
            "[]",
            "[1.0]",
            "[1.0, 2.0, 3.0]",
            "9223372036854775807",
            "-9223372036854775808",
        ];
        if self.chance(12) {
            return self.pick(EXTREME).to_string();
        }
        let (lo, hi) = ordinary;
        let u = self.below(1_000_001) as f64 / 1e6;
        let v = lo * (hi / lo).powf(u);
        if self.chance(30) {
            format!("{:.0}.0", v.round())
        } else {
            format!("{v:e}")
        }
    }
    fn edge(&mut self, band: bool, around: f64, wide: f64) -> String {
        if band || self.chance(5) {
            let a = self.number((around / wide, around));
            let b = self.number((around, around * wide));
            if self.chance(10) {
                format!("[{b}, {a}]")
            } else {
                format!("[{a}, {b}]")
            }
        } else {
            self.number((around / wide, around * wide))
        }
    }
    fn int(&mut self, ordinary: (i64, i64)) -> String {
        const EXTREME: &[&str] = &[
            "0",
            "-1",
            "26",
            "100",
            "4294967297",
            "9223372036854775807",
            "2.5",
            "\"3\"",
        ];
        if self.chance(8) {
            return self.pick(EXTREME).to_string();
        }
        let (lo, hi) = ordinary;
        (lo + self.below((hi - lo + 1) as usize) as i64).to_string()
    }

    /// A design file from the grammar.
    fn grammar(&mut self) -> (String, Option<String>) {
        let mut s = String::from("[filter]\n");
        let kind = self.pick(&["lowpass", "highpass", "bandpass", "bandstop", "allpass"]);
        let band = matches!(kind, "bandpass" | "bandstop");
        s += &format!("kind = \"{kind}\"\n");
        let mut table = None;
        if self.chance(8) {
            s += "prototype = \"TABLE\"\n";
            table = Some(self.table());
        } else if !self.chance(3) {
            let family = self.pick(&[
                "butterworth",
                "chebyshev",
                "elliptic",
                "bessel",
                "inverse_chebyshev",
                "legendre",
            ]);
            s += &format!("family = \"{family}\"\n");
        }
        let f = 10f64.powf(self.below(7) as f64 - 1.0);
        // Now and then a Bessel lowpass's other frequency scales, alone or
        // beside the edge (refused by key there).
        if self.chance(6) {
            s += &format!("dc_delay_s = {}\n", self.number((1e-6, 1e-1)));
        }
        if self.chance(6) {
            s += &format!("asymptote_hz = {}\n", self.number((1.0, 1e6)));
        }
        if !self.chance(6) {
            s += &format!("passband_edge_hz = {}\n", self.edge(band, f, 1.5));
        }
        let given_order = self.chance(50);
        if given_order {
            // Orders to 12 (a 24th-order band filter); in every test run
            // to 8, for the reason `short` gives.
            let highest = if self.short { 8 } else { 12 };
            s += &format!("order = {}\n", self.int((1, highest)));
        }
        if !given_order || self.chance(40) {
            s += &format!("stopband_edge_hz = {}\n", self.edge(band, f * 1.2, 4.0));
        }
        self.maybe_key(&mut s, 70, "passband_ripple_db", (0.01, 3.0));
        self.maybe_key(&mut s, 70, "stopband_attenuation_db", (10.0, 90.0));
        if self.chance(15) {
            s += &format!(
                "form = \"{}\"\n",
                self.pick(&["min_capacitor", "min_inductor", "both"])
            );
        }
        s += "\n[terminations]\n";
        if !self.chance(3) {
            s += &format!("source_ohm = {}\n", self.number((50.0, 100e3)));
        }
        if !self.chance(3) {
            s += &format!("load_ohm = {}\n", self.number((50.0, 100e3)));
        }
        if self.chance(20) {
            s += &format!("level = \"{}\"\n", self.pick(&["fixed", "free", "auto"]));
        }
        if self.chance(30) {
            s += "\n[active]\n";
            if self.chance(70) {
                s += &format!(
                    "method = \"{}\"\n",
                    self.pick(&["auto", "gic", "fdnr", "gyrator"])
                );
            }
            if self.chance(40) {
                s += &format!("optimize = {}\n", self.pick(&["true", "false", "1"]));
            }
        }
        if self.chance(40) {
            s += "\n[opamp]\n";
            let model = self.pick(&["single_pole", "two_pole", "ideal", "three_pole"]);
            s += &format!("model = \"{model}\"\n");
            self.maybe_key(&mut s, 70, "gbw_hz", (1e5, 1e9));
            self.maybe_key(&mut s, 50, "dc_gain_db", (40.0, 160.0));
            if model == "two_pole" || self.chance(10) {
                s += &format!("second_pole_hz = {}\n", self.number((1e5, 1e9)));
            }
            self.maybe_key(&mut s, 30, "output_ohm", (1.0, 500.0));
            self.maybe_key(&mut s, 30, "swing_v", (0.5, 20.0));
            self.maybe_key(&mut s, 20, "en_v_per_rthz", (0.0, 1e-7));
            self.maybe_key(&mut s, 20, "en_corner_hz", (0.0, 1e4));
            self.maybe_key(&mut s, 20, "in_a_per_rthz", (0.0, 1e-10));
            self.maybe_key(&mut s, 20, "in_corner_hz", (0.0, 1e4));
            self.maybe_key(&mut s, 20, "slew_v_per_s", (1e4, 1e9));
            self.maybe_key(&mut s, 20, "output_current_a", (1e-5, 1.0));
            self.maybe_key(&mut s, 20, "bias_current_a", (0.0, 1e-5));
        }
        if self.chance(10) {
            s += "\n[noise]\n";
            self.maybe_key(&mut s, 50, "temperature_k", (0.5, 1200.0));
            if self.chance(50) {
                s += &format!("band_hz = {}\n", self.edge(true, f, 10.0));
            }
            if self.chance(50) {
                s += &format!("weighting = \"{}\"\n", self.pick(&["a", "none", "c"]));
            }
        }
        if self.chance(10) {
            s += &format!("\n[adc]\nbits = {}\n", self.int((0, 40)));
        }
        if self.chance(40) {
            s += "\n[parts]\n";
            let series = ["E3", "E6", "E12", "E24", "E48", "E96", "E192", "E5"];
            if self.chance(50) {
                s += &format!("resistor_series = \"{}\"\n", self.pick(&series));
            }
            if self.chance(50) {
                s += &format!("capacitor_series = \"{}\"\n", self.pick(&series));
            }
            self.maybe_key(&mut s, 40, "resistor_tolerance", (0.001, 0.2));
            self.maybe_key(&mut s, 40, "capacitor_tolerance", (0.001, 0.2));
            if self.chance(40) {
                let a = self.number((1e-12, 1e-8));
                let b = self.number((1e-8, 1e-4));
                s += &format!("capacitor_range = [{a}, {b}]\n");
            }
            if self.chance(20) {
                let a = self.number((1.0, 1e4));
                let b = self.number((1e4, 1e8));
                s += &format!("resistor_range = [{a}, {b}]\n");
            }
            self.maybe_key(&mut s, 20, "dc_path_max_ohm", (1e3, 1e9));
            if self.chance(20) {
                s += &format!(
                    "distribution = \"{}\"\n",
                    self.pick(&["uniform", "gaussian", "normal"])
                );
            }
        }
        // The Monte Carlo is kept short unless the file asks otherwise:
        // the run's cost is the design's, not a long yield run's.
        s += "\n[montecarlo]\n";
        s += &format!("trials = {}\n", self.int((1, 60)));
        if self.chance(30) {
            s += &format!("seed = {}\n", self.int((0, 1000)));
        }
        self.maybe_key(&mut s, 30, "gbw_spread", (0.01, 0.5));
        self.maybe_key(&mut s, 20, "passband_margin_db", (0.001, 1.0));
        self.maybe_key(&mut s, 20, "stopband_margin_db", (0.1, 10.0));
        if self.chance(5) {
            s += "colour = \"blue\"\n";
        }
        if self.chance(10) {
            s += "\n[yield]\n";
            self.maybe_key(&mut s, 90, "target", (0.001, 1.2));
            if self.chance(50) {
                s += &format!("max_extra_order = {}\n", self.int((-1, 5)));
            }
        }
        if self.chance(12) {
            s += "\n[delay]\n";
            self.maybe_key(&mut s, 60, "max_spread_s", (1e-9, 1e-2));
            self.maybe_key(&mut s, 50, "max_spread_pct", (0.01, 50.0));
            if self.chance(50) {
                s += &format!("band_hz = {}\n", self.edge(band, f * 0.5, 2.0));
            }
        }
        (s, table)
    }

    /// A prototype table, sometimes malformed.
    fn table(&mut self) -> String {
        let arms = if self.chance(5) {
            100
        } else {
            1 + self.below(9)
        };
        let mut s = format!(
            "description = \"generated\"\nreference = \"none: a generated case\"\norder = {}\npassband_ripple_db = {}\nload_ohm = {}\n",
            self.int((1, 9)),
            self.number((0.1, 3.0)),
            self.number((0.5, 2.0)),
        );
        for i in 0..arms {
            let v = self.number((0.2, 3.0));
            let w = self.number((0.2, 3.0));
            s += &match (i + self.below(2)) % 4 {
                0 => format!("[[arm]]\nshunt_c = {v}\n"),
                1 => format!("[[arm]]\nseries_l = {v}\n"),
                2 => format!("[[arm]]\nseries_tank = [{v}, {w}]\n"),
                _ => format!("[[arm]]\nshunt_resonator = [{v}, {w}]\n"),
            };
        }
        s
    }

    /// An example, mutated.
    fn mutation(&mut self) -> String {
        let which = self.below(self.examples.len());
        let text = self.examples[which].clone();
        let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
        for _ in 0..1 + self.below(3) {
            let i = self.below(lines.len().max(1));
            match self.below(6) {
                0 if !lines.is_empty() => {
                    lines.remove(i);
                }
                1 if !lines.is_empty() => {
                    let l = lines[i].clone();
                    lines.insert(i, l);
                }
                2 if !lines.is_empty() => {
                    // A number swapped for another.
                    if let Some((key, _)) = lines[i].split_once('=') {
                        let v = self.number((1e-3, 1e6));
                        lines[i] = format!("{key}= {v}");
                    }
                }
                3 if !lines.is_empty() => {
                    let cut = self.below(lines[i].len() + 1);
                    let cut = (0..=cut)
                        .rev()
                        .find(|&c| lines[i].is_char_boundary(c))
                        .unwrap_or(0);
                    lines[i].truncate(cut);
                }
                4 => {
                    let v = self.number((1.0, 1e5));
                    lines.insert(i.min(lines.len()), format!("order = {v}"));
                }
                _ => {
                    let bytes: String = (0..self.below(12))
                        .map(|_| {
                            const BYTES: &[u8] = b" =[]\"#.,0123456789eE+-abc\n\t";
                            char::from(BYTES[self.below(BYTES.len())])
                        })
                        .collect();
                    lines.insert(i.min(lines.len()), bytes);
                }
            }
        }
        if self.short {
            lines.push("[montecarlo]\ntrials = 50".to_string());
        }
        // The examples' prototype path points at the shipped tables.
        let proto = Path::new(env!("CARGO_MANIFEST_DIR")).join("prototypes");
        lines
            .join("\n")
            .replace("../prototypes", &proto.display().to_string())
            + "\n"
    }

    /// Bytes that are hardly a design file at all.
    fn garbage(&mut self) -> String {
        (0..self.below(200))
            .map(|_| match self.below(4) {
                0 => char::from_u32(self.below(0x3000) as u32).unwrap_or('?'),
                _ => {
                    const BYTES: &[u8] = b"[]=\"\n abcdefgh0123456789.e-_";
                    char::from(BYTES[self.below(BYTES.len())])
                }
            })
            .collect()
    }

    fn case(&mut self) -> Case {
        let (spec, table) = match self.below(10) {
            0..=5 => self.grammar(),
            6..=8 => (self.mutation(), None),
            _ => (self.garbage(), None),
        };
        let mut args: Vec<String> = Vec::new();
        let sub = self.pick(&[
            "design",
            "design",
            "design",
            "sweep",
            "montecarlo",
            "bom",
            "sensitivity",
            "levels",
            "noise",
            "step",
            "report",
            "order",
        ]);
        args.push(sub.to_string());
        match sub {
            "order" => {
                let kind = self.pick(&["lowpass", "highpass", "bandpass", "bandstop", "notch"]);
                let band = kind.starts_with("band");
                args.extend(["--kind".into(), kind.into()]);
                let p = self.edge(band, 1000.0, 1.5);
                let st = self.edge(band, 1500.0, 4.0);
                let flag = |v: String| v.trim_matches(['[', ']']).replace(' ', "");
                args.extend(["--passband".into(), flag(p), "--stopband".into(), flag(st)]);
                args.extend(["--ripple".into(), self.number((0.01, 3.0))]);
                args.extend(["--attenuation".into(), self.number((10.0, 100.0))]);
            }
            _ => {
                args.push("SPEC".into());
                match sub {
                    "design" | "report" => args.extend(["--out".into(), "OUT".into()]),
                    "noise" | "step" if self.chance(50) => args.push("--csv".into()),
                    "sweep" => {
                        if self.chance(50) {
                            args.extend(["--points".into(), self.int((2, 60))]);
                        } else {
                            args.extend(["--points".into(), "40".into()]);
                        }
                        if self.chance(20) {
                            args.extend(["--from".into(), self.number((1e-3, 1e3))]);
                        }
                        if self.chance(20) {
                            args.extend(["--to".into(), self.number((1e2, 1e7))]);
                        }
                    }
                    "montecarlo" => {
                        args.extend(["--trials".into(), self.int((1, 60))]);
                        if self.chance(20) {
                            args.extend(["--threads".into(), self.int((1, 4))]);
                        }
                        if self.chance(30) {
                            args.extend(["--out".into(), "OUT".into()]);
                        }
                    }
                    _ => {}
                }
            }
        }
        Case { spec, table, args }
    }
}

/// Words that are a NaN or an infinity as a number prints (not the word
/// "infinity" of prose, as in "a transmission zero at infinity").
fn non_finite(text: &str) -> Option<String> {
    text.split(|c: char| !(c.is_ascii_alphanumeric() || c == '.' || c == '+' || c == '-'))
        .map(|w| w.trim_start_matches(['+', '-']))
        .find(|w| {
            let w = w.to_ascii_lowercase();
            w == "nan" || w == "inf"
        })
        .map(str::to_string)
}

/// Runs one case in a folder of its own and classifies it.
fn run(case: &Case) -> Outcome {
    let dir = tempfile::tempdir().expect("temporary folder");
    let spec = dir.path().join("spec.toml");
    let table = dir.path().join("table.toml");
    let out = dir.path().join("out");
    let text = case.spec.replace("TABLE", &table.display().to_string());
    std::fs::write(&spec, text).expect("design file");
    if let Some(t) = &case.table {
        std::fs::write(&table, t).expect("table");
    }
    let args: Vec<String> = case
        .args
        .iter()
        .map(|a| match a.as_str() {
            "SPEC" => spec.display().to_string(),
            "OUT" => out.display().to_string(),
            _ => a.clone(),
        })
        .collect();
    let mut child = Command::new(binary())
        .args(&args)
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start nocoil");
    // The pipes are drained by threads, so a large output cannot block
    // the child while the clock runs.
    let drain = |mut pipe: Box<dyn std::io::Read + Send>| {
        std::thread::spawn(move || {
            let mut s = Vec::new();
            let _ = pipe.read_to_end(&mut s);
            String::from_utf8_lossy(&s).into_owned()
        })
    };
    let stdout = drain(Box::new(child.stdout.take().expect("stdout")));
    let stderr = drain(Box::new(child.stderr.take().expect("stderr")));
    let started = Instant::now();
    let hang_s = match case.spec.contains("[yield]") {
        true => SEARCH_HANG_S,
        false => HANG_S,
    };
    let status = loop {
        if let Some(status) = child.try_wait().expect("wait") {
            break Some(status);
        }
        if started.elapsed() > Duration::from_secs(hang_s) {
            let _ = child.kill();
            let _ = child.wait();
            break None;
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    let (stdout, stderr) = (
        stdout.join().unwrap_or_default(),
        stderr.join().unwrap_or_default(),
    );
    let Some(status) = status else {
        return Outcome::Broken(format!("hang: still running after {hang_s} s"));
    };
    match status.code() {
        Some(0) => check_success(&stdout, &out),
        Some(2) => check_refusal(&stderr, &spec, &out),
        Some(code) => Outcome::Broken(format!("exit {code}: {}", stderr.trim())),
        None => Outcome::Broken(format!("killed by a signal: {}", stderr.trim())),
    }
}

/// Exit 0: every file the run says it wrote is there, no staging folder
/// is left, and nothing holds a NaN or an infinity.
fn check_success(stdout: &str, out: &Path) -> Outcome {
    if let Some(w) = non_finite(stdout) {
        return Outcome::Broken(format!("standard output holds {w}"));
    }
    let said: Vec<&str> = stdout
        .lines()
        .filter_map(|l| l.strip_prefix("wrote into "))
        .filter_map(|l| l.split_once(": ").map(|(_, names)| names))
        .flat_map(|names| names.split(", "))
        .collect();
    for name in &said {
        let path = out.join(name);
        let Ok(bytes) = std::fs::read(&path) else {
            return Outcome::Broken(format!("{name} is said to be written but is not there"));
        };
        if name.ends_with(".png") {
            continue;
        }
        if let Some(w) = non_finite(&String::from_utf8_lossy(&bytes)) {
            return Outcome::Broken(format!("{name} holds {w}"));
        }
    }
    leftovers(out)
}

/// Exit 2: one line on standard error naming the design file or a flag,
/// and the output folder holds no part of a set beyond what a refused
/// active build promises (the passive ideal's deck and report).
fn check_refusal(stderr: &str, spec: &Path, out: &Path) -> Outcome {
    let lines: Vec<&str> = stderr.lines().collect();
    let [line] = lines.as_slice() else {
        return Outcome::Broken(format!(
            "exit 2 with {} lines on standard error: {stderr}",
            lines.len()
        ));
    };
    let names_input = line.contains(&spec.display().to_string())
        || line.contains("table.toml")
        || line.contains(" --");
    if !line.starts_with("nocoil: ") || !names_input {
        return Outcome::Broken(format!("exit 2 without naming the file or flag: {line}"));
    }
    if let Ok(entries) = std::fs::read_dir(out) {
        for e in entries.flatten() {
            let name = e.file_name().to_string_lossy().into_owned();
            if !matches!(name.as_str(), "passive.cir" | "report.json") {
                return Outcome::Broken(format!("exit 2 left {name} in the output folder"));
            }
        }
    }
    leftovers(out)
}

/// No staging folder or temporary file may outlive a run.
fn leftovers(out: &Path) -> Outcome {
    if let Ok(entries) = std::fs::read_dir(out) {
        for e in entries.flatten() {
            let name = e.file_name().to_string_lossy().into_owned();
            if name.starts_with('.') {
                return Outcome::Broken(format!("{name} left in the output folder"));
            }
        }
    }
    Outcome::Fine
}

/// The smallest case that still breaks the same way: design-file lines
/// removed one at a time, then optional flags dropped.
fn shrink(case: &Case, broken: &str) -> Case {
    let runs = std::cell::Cell::new(0);
    let same = |c: &Case| {
        runs.set(runs.get() + 1);
        runs.get() <= SHRINK_RUNS
            && match run(c) {
                Outcome::Broken(why) => why.split(':').next() == broken.split(':').next(),
                Outcome::Fine => false,
            }
    };
    let mut best = case.clone();
    let mut i = 0;
    while i < best.spec.lines().count() {
        let mut lines: Vec<&str> = best.spec.lines().collect();
        lines.remove(i);
        let trial = Case {
            spec: lines.join("\n") + "\n",
            ..best.clone()
        };
        if same(&trial) {
            best = trial;
        } else {
            i += 1;
        }
    }
    let mut j = 2;
    while j + 1 < best.args.len() {
        let mut args = best.args.clone();
        if args[j].starts_with("--") && args[j] != "--out" {
            args.drain(j..j + 2);
            let trial = Case {
                args,
                ..best.clone()
            };
            if same(&trial) {
                best = trial;
                continue;
            }
        }
        j += 1;
    }
    best
}

/// Runs cases from `seed` on every core until `cases` are done or
/// `budget` has passed; returns (cases run, failures with their smallest
/// input).
fn campaign(
    seed: u64,
    (first, cases): (usize, usize),
    budget: Duration,
    short: bool,
) -> (usize, Vec<(String, Case)>) {
    let started = Instant::now();
    let next = AtomicUsize::new(0);
    let failures = Mutex::new(Vec::new());
    // The slowest case and its time: the margin under the hang bound.
    let slowest = Mutex::new((Duration::ZERO, 0));
    let examples = examples();
    let threads = std::thread::available_parallelism().map_or(2, |n| n.get());
    std::thread::scope(|scope| {
        for _ in 0..threads {
            scope.spawn(|| loop {
                let index = next.fetch_add(1, Ordering::Relaxed);
                if index >= cases || started.elapsed() > budget {
                    break;
                }
                let index = first + index;
                let mut rng = ChaCha8Rng::seed_from_u64(seed);
                rng.set_stream(index as u64);
                let case = Gen {
                    rng,
                    examples: examples.clone(),
                    short,
                }
                .case();
                if std::env::var_os("NOCOIL_FUZZ_SHOW").is_some() {
                    eprintln!(
                        "fuzz case {index}:\n{}",
                        report(&[(String::new(), case.clone())])
                    );
                }
                let began = Instant::now();
                let outcome = run(&case);
                let took = began.elapsed();
                let mut slow = slowest.lock().expect("slowest");
                if took > slow.0 {
                    *slow = (took, index);
                }
                drop(slow);
                if let Outcome::Broken(why) = outcome {
                    eprintln!("fuzz case {index}: {why}");
                    failures.lock().expect("failures").push((why, case));
                }
            });
        }
    });
    let done = next.load(Ordering::Relaxed).min(cases);
    let (took, index) = slowest.into_inner().expect("slowest");
    eprintln!(
        "fuzz: {done} cases; the slowest, case {index}, took {:.1} s of the {HANG_S} s bound",
        took.as_secs_f64()
    );
    let mut failures = failures.into_inner().expect("failures");
    failures.sort_by(|a, b| a.0.cmp(&b.0));
    // The first case of each way of breaking (up to SHRUNK of them) is
    // shrunk; shrinking costs a run per line.
    let mut shrunk: Vec<(String, Case)> = Vec::new();
    for (why, case) in failures {
        let class = |w: &str| w.split(':').next().unwrap_or_default().to_string();
        if shrunk.len() < SHRUNK && shrunk.iter().all(|(w, _)| class(w) != class(&why)) {
            let small = shrink(&case, &why);
            shrunk.push((why, small));
        } else {
            shrunk.push((why, case));
        }
    }
    (done, shrunk)
}

/// How many failures are shrunk before they are reported.
const SHRUNK: usize = 5;

/// Most runs spent shrinking one failure.
const SHRINK_RUNS: usize = 80;

fn report(failures: &[(String, Case)]) -> String {
    failures
        .iter()
        .take(10)
        .map(|(why, c)| {
            format!(
                "{why}\n  args: {:?}\n  design file:\n{}\n  table: {:?}\n",
                c.args, c.spec, c.table
            )
        })
        .collect()
}

fn env_number(name: &str, default: u64) -> u64 {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

#[test]
fn fuzz_command_line() {
    let (done, failures) = campaign(1, (0, CI_CASES), Duration::from_secs(u64::MAX / 4), true);
    assert_eq!(done, CI_CASES);
    assert!(
        failures.is_empty(),
        "{} of {done} cases broke the contract:\n{}",
        failures.len(),
        report(&failures)
    );
}

#[test]
#[ignore = "long: cargo test --release -- --ignored fuzz_long"]
fn fuzz_long() {
    let cases = env_number("NOCOIL_FUZZ_CASES", 200_000) as usize;
    let budget = Duration::from_secs(env_number("NOCOIL_FUZZ_SECONDS", 3_600));
    let seed = env_number("NOCOIL_FUZZ_SEED", 1);
    // A failing case is found again by its index: NOCOIL_FUZZ_FIRST=i
    // NOCOIL_FUZZ_CASES=1.
    let first = env_number("NOCOIL_FUZZ_FIRST", 0) as usize;
    let (done, failures) = campaign(seed, (first, cases), budget, false);
    eprintln!(
        "fuzz_long: {done} cases, {} broke the contract",
        failures.len()
    );
    assert!(
        failures.is_empty(),
        "{} of {done} cases broke the contract:\n{}",
        failures.len(),
        report(&failures)
    );
}

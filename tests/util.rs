//! Shared test helpers: running ngspice live on a deck and comparing
//! responses with expected/got blocks.
//!
//! ngspice is a reference the project did not write, so tests run it live
//! rather than storing its output. A missing ngspice fails the test (it
//! never skips): install the Debian package `ngspice`.

use std::path::Path;
use std::process::Command;

use num_complex::Complex64;

/// One analysis of an ngspice raw file: its name and its vectors.
#[derive(Debug, Clone)]
pub struct Plot {
    /// "AC Analysis", "Transient Analysis", ...
    pub name: String,
    /// Vector names as ngspice writes them, lowercased ("frequency",
    /// "v(out)", "i(v1)"), with one value per point (real analyses have a
    /// zero imaginary part).
    pub vectors: Vec<(String, Vec<Complex64>)>,
}

impl Plot {
    /// The vector with this name (case-insensitive); panics listing the
    /// names present if it is missing.
    pub fn vector(&self, name: &str) -> &[Complex64] {
        let wanted = name.to_ascii_lowercase();
        match self.vectors.iter().find(|(n, _)| *n == wanted) {
            Some((_, v)) => v,
            None => panic!(
                "ngspice plot {:?} has no vector {wanted:?}; it has {:?}",
                self.name,
                self.vectors.iter().map(|(n, _)| n).collect::<Vec<_>>()
            ),
        }
    }
}

/// Runs `ngspice -b -r <raw> <deck>` with an ASCII raw file in a temporary
/// directory and returns every analysis in it. Panics with ngspice's
/// output if it cannot run or writes no raw file.
pub fn ngspice_run(deck: &str) -> Vec<Plot> {
    let dir = tempfile::tempdir().expect("temporary directory for ngspice");
    let deck_path = dir.path().join("deck.cir");
    let raw_path = dir.path().join("deck.raw");
    std::fs::write(&deck_path, deck).expect("write the deck");
    let output = Command::new("ngspice")
        .current_dir(dir.path())
        .env("SPICE_ASCIIRAWFILE", "1")
        .arg("-b")
        .arg("-r")
        .arg(&raw_path)
        .arg(&deck_path)
        .output()
        .unwrap_or_else(|e| {
            panic!("cannot run ngspice ({e}): these tests need it; install the Debian package `ngspice` (apt-get install ngspice)")
        });
    let log = || {
        format!(
            "ngspice status {}\n--- stderr\n{}\n--- stdout\n{}\n--- deck\n{deck}",
            output.status,
            String::from_utf8_lossy(&output.stderr),
            String::from_utf8_lossy(&output.stdout)
        )
    };
    if !output.status.success() || !Path::new(&raw_path).exists() {
        panic!("ngspice failed\n{}", log());
    }
    let text = std::fs::read_to_string(&raw_path).expect("read the raw file");
    let plots = parse_raw(&text);
    if plots.is_empty() {
        panic!("ngspice wrote no analysis\n{}", log());
    }
    plots
}

/// The analysis whose name starts with `prefix` (e.g. "AC", "Transient").
pub fn ngspice_plot(deck: &str, prefix: &str) -> Plot {
    let plots = ngspice_run(deck);
    let names: Vec<String> = plots.iter().map(|p| p.name.clone()).collect();
    plots
        .into_iter()
        .find(|p| p.name.starts_with(prefix))
        .unwrap_or_else(|| panic!("no ngspice analysis named {prefix:?}...; got {names:?}"))
}

/// Frequency and complex V(out) of the deck's `.ac` analysis.
pub fn ngspice_ac(deck: &str) -> Vec<(f64, Complex64)> {
    let plot = ngspice_plot(deck, "AC");
    let f = plot.vector("frequency");
    f.iter()
        .map(|f| f.re)
        .zip(plot.vector("v(out)").iter().copied())
        .collect()
}

/// Time and V(node) of the deck's `.tran` analysis.
pub fn ngspice_tran(deck_with_tran: &str, node: &str) -> Vec<(f64, f64)> {
    let plot = ngspice_plot(deck_with_tran, "Transient");
    let t = plot.vector("time");
    let v = plot.vector(&format!("v({node})"));
    t.iter().zip(v).map(|(t, v)| (t.re, v.re)).collect()
}

/// Parses every plot of an ASCII raw file.
fn parse_raw(text: &str) -> Vec<Plot> {
    let mut lines = text.lines();
    std::iter::from_fn(|| parse_plot(&mut lines)).collect()
}

/// Parses one plot: header lines up to `Variables:`, the variable list,
/// then `Values:` with, per point, its index and one value per variable
/// (`re,im` for complex analyses, `re` for real ones).
fn parse_plot<'a>(lines: &mut impl Iterator<Item = &'a str>) -> Option<Plot> {
    let (mut name, mut vars, mut points) = (None, 0usize, 0usize);
    for line in lines.by_ref() {
        let field = |key: &str| line.strip_prefix(key).map(str::trim);
        if let Some(v) = field("Plotname:") {
            name = Some(v.to_string());
        } else if let Some(v) = field("No. Variables:") {
            vars = v.parse().expect("variable count");
        } else if let Some(v) = field("No. Points:") {
            points = v.parse().expect("point count");
        } else if line.trim() == "Variables:" {
            break;
        }
    }
    let name = name?;
    let names: Vec<String> = lines
        .by_ref()
        .take(vars)
        .map(|l| {
            l.split_whitespace()
                .nth(1)
                .expect("variable name")
                .to_ascii_lowercase()
        })
        .collect();
    assert_eq!(
        lines.next().map(str::trim),
        Some("Values:"),
        "raw file layout"
    );
    let wanted = points * (vars + 1);
    let mut tokens: Vec<&str> = Vec::with_capacity(wanted);
    while tokens.len() < wanted {
        let line = lines.next().expect("raw file ends inside its values");
        tokens.extend(line.split_whitespace());
    }
    let mut vectors: Vec<(String, Vec<Complex64>)> =
        names.into_iter().map(|n| (n, Vec::new())).collect();
    for point in tokens.chunks(vars + 1) {
        for ((_, v), token) in vectors.iter_mut().zip(&point[1..]) {
            v.push(parse_value(token));
        }
    }
    Some(Plot { name, vectors })
}

fn parse_value(token: &str) -> Complex64 {
    let number = |s: &str| {
        s.parse::<f64>()
            .unwrap_or_else(|e| panic!("raw value {token:?}: {e}"))
    };
    match token.split_once(',') {
        Some((re, im)) => Complex64::new(number(re), number(im)),
        None => Complex64::new(number(token), 0.0),
    }
}

/// Asserts |20 log10|got/expected|| <= tol_db and the phase of
/// got/expected within tol_deg at every point; on failure prints the worst
/// point and the expected/got blocks.
pub fn assert_close_response(
    freq_hz: &[f64],
    expected: &[Complex64],
    got: &[Complex64],
    tol_db: f64,
    tol_deg: f64,
    context: &str,
) {
    assert_eq!(expected.len(), got.len(), "{context}: lengths differ");
    assert_eq!(
        freq_hz.len(),
        got.len(),
        "{context}: frequency count differs"
    );
    let errors: Vec<(f64, f64)> = expected
        .iter()
        .zip(got)
        .map(|(e, g)| {
            let ratio = g / e;
            (20.0 * ratio.norm().log10(), ratio.arg().to_degrees())
        })
        .collect();
    let worst_db = errors.iter().map(|e| e.0.abs()).fold(0.0, f64::max);
    let worst_deg = errors.iter().map(|e| e.1.abs()).fold(0.0, f64::max);
    if worst_db.is_nan() || worst_deg.is_nan() || worst_db > tol_db || worst_deg > tol_deg {
        let block = |h: &[Complex64]| {
            freq_hz
                .iter()
                .zip(h)
                .map(|(f, h)| {
                    format!(
                        "  {f:14.6e} Hz  {:+.9} dB  {:+.6} deg",
                        20.0 * h.norm().log10(),
                        h.arg().to_degrees()
                    )
                })
                .collect::<Vec<_>>()
                .join("\n")
        };
        panic!(
            "{context}: worst error {worst_db:.3e} dB (tol {tol_db:e}), {worst_deg:.3e} deg (tol {tol_deg:e})\n--- expected\n{}\n--- got\n{}",
            block(expected),
            block(got)
        );
    }
}

/// Asserts |got - expected| <= tol * |expected| elementwise, printing the
/// worst index and both blocks on failure.
pub fn assert_close_rel(expected: &[Complex64], got: &[Complex64], tol: f64, context: &str) {
    assert_eq!(expected.len(), got.len(), "{context}: lengths differ");
    let errors: Vec<f64> = expected
        .iter()
        .zip(got)
        .map(|(e, g)| (g - e).norm() / e.norm())
        .collect();
    let (worst, err) = errors
        .iter()
        .copied()
        .enumerate()
        .fold((0, 0.0), |best, cand| {
            if cand.1 > best.1 || cand.1.is_nan() {
                cand
            } else {
                best
            }
        });
    if err.is_nan() || err > tol {
        panic!("{context}: worst relative error {err:.3e} at index {worst} (tol {tol:e})\n--- expected\n{expected:?}\n--- got\n{got:?}");
    }
}

/// Runs the `nocoil` binary with `args`.
pub fn nocoil(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_nocoil"))
        .args(args)
        .output()
        .expect("the nocoil binary runs")
}

/// A fresh scratch folder under the target directory.
pub fn scratch(name: &str) -> std::path::PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// Writes `text` as the design file `dir/spec.toml` and returns its path.
pub fn spec_in(dir: &Path, text: &str) -> std::path::PathBuf {
    let spec = dir.join("spec.toml");
    std::fs::write(&spec, text).unwrap();
    spec
}

/// `nocoil design SPEC --out OUT`.
pub fn design_into(spec: &Path, out: &Path) -> std::process::Output {
    nocoil(&[
        "design",
        spec.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
    ])
}

/// A 1 V source at `in` and the elements given (R, C or L by the
/// name's first letter), nodes by name (`0` is ground).
pub fn driven(elements: &[(&str, &str, &str, f64)]) -> nocoil::circuit::Netlist {
    let mut n = nocoil::circuit::Netlist::new("test circuit");
    let inp = n.node("in");
    n.add(nocoil::circuit::Element::VoltageSource {
        name: "V1".into(),
        pos: inp,
        neg: 0,
        ac_volt: 1.0,
    })
    .unwrap();
    for &(name, a, b, v) in elements {
        let (a, b) = (n.node(a), n.node(b));
        let e = match name.as_bytes()[0] {
            b'R' => nocoil::circuit::Element::Resistor {
                name: name.into(),
                a,
                b,
                ohm: v,
            },
            b'C' => nocoil::circuit::Element::Capacitor {
                name: name.into(),
                a,
                b,
                farad: v,
            },
            _ => nocoil::circuit::Element::Inductor {
                name: name.into(),
                a,
                b,
                henry: v,
            },
        };
        n.add(e).unwrap();
    }
    n
}

/// The design of a shipped example file.
pub fn example(file: &str) -> nocoil::design::Design {
    nocoil::design::design(&nocoil::spec::Spec::load(Path::new(file)).unwrap()).unwrap()
}

/// `text` (a design file) with the TOML of `extra` added: the keys of
/// each of its tables into that table where `text` has it (a table may
/// appear once), the rest appended.
pub fn with_tables(text: &str, extra: &str) -> String {
    let mut text = text.to_string();
    let mut appended = String::new();
    for chunk in extra
        .split_inclusive('\n')
        .fold(Vec::<String>::new(), |mut chunks, line| {
            match (line.starts_with('['), chunks.last_mut()) {
                (false, Some(last)) => last.push_str(line),
                _ => chunks.push(line.to_string()),
            }
            chunks
        })
    {
        let header = chunk.lines().next().unwrap_or_default().to_string();
        let at = format!("\n{header}\n");
        match header.starts_with('[') && text.contains(&at) {
            true => text = text.replacen(&at, &format!("\n{chunk}"), 1),
            false => appended.push_str(&chunk),
        }
    }
    format!("{text}\n{appended}")
}

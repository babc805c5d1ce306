//! The design file (TOML): what the designer asks for, validated.
//!
//! Parsing happens in two steps, so that every problem can be reported
//! with the file, the key and what would be accepted: serde reads the raw
//! tables (unknown keys are rejected by name), then [`Spec::from_toml`]
//! checks every value and their relations and builds the plain [`Spec`].
//! Nothing here knows how a filter is computed; the vocabulary of the
//! design file ([`Kind`], [`FamilyChoice`], [`FormChoice`]) is its own.

pub mod mask;
mod raw;

pub use raw::HALF_POWER_DB;

use std::path::{Path, PathBuf};

/// Highest order a design file may ask for. The all-pole families stay
/// accurate to this order in the synthesis stage; elliptic designs have a
/// lower limit of their own, enforced where the approximation is built.
pub const MAX_ORDER: usize = 25;

/// The kind of filter.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    /// Passes below the passband edge.
    Lowpass,
    /// Passes above the passband edge.
    Highpass,
    /// Passes between two edges.
    Bandpass,
    /// Stops between two edges.
    Bandstop,
}

impl Kind {
    /// Whether the kind takes `[low, high]` edges.
    pub fn is_band(self) -> bool {
        matches!(self, Kind::Bandpass | Kind::Bandstop)
    }
}

/// The approximation family named in a design file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum FamilyChoice {
    /// Maximally flat.
    Butterworth,
    /// Equiripple passband (type I).
    Chebyshev,
    /// Equiripple passband and stopband (Cauer).
    Elliptic,
}

/// Which of the two dual ladders a design file asks for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FormChoice {
    /// Shunt capacitor first.
    MinInductor,
    /// Series inductor first.
    MinCapacitor,
}

impl FormChoice {
    /// The value as a design file writes it.
    pub fn as_str(self) -> &'static str {
        match self {
            FormChoice::MinInductor => "min_inductor",
            FormChoice::MinCapacitor => "min_capacitor",
        }
    }
}

/// How the inductors are to be removed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum MethodChoice {
    /// The realization with the fewest op-amps that serves every element.
    Auto,
    /// Simulated inductors (generalized impedance converters).
    Gic,
    /// Bruton's transformation to frequency-dependent negative resistors
    /// (lowpass only).
    Fdnr,
}

/// The `[active]` table.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ActiveSpec {
    /// The realization asked for (default `auto`).
    pub method: MethodChoice,
    /// Whether to choose the converters' free values numerically, for the
    /// least passband error with the op-amp model (default false: the
    /// balanced-converter rule).
    pub optimize: bool,
}

/// Which op-amp model the active build is simulated with.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum OpAmpKind {
    /// A(s) = A0 / (1 + s A0 / (2 pi GBW)).
    SinglePole,
    /// Infinite gain and bandwidth (a nullor): the active network then
    /// equals the passive ideal, which checks the realization itself.
    Ideal,
}

/// The `[opamp]` table.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct OpAmpSpec {
    /// The model (default single-pole).
    pub model: OpAmpKind,
    /// Gain-bandwidth product, Hz (default 10 MHz).
    pub gbw_hz: f64,
    /// Open-loop DC gain, dB (default 100 dB).
    pub dc_gain_db: f64,
    /// Output resistance, ohm (default 0).
    pub output_ohm: f64,
    /// Largest output swing, V peak (default 10 V, a +-15 V supply less
    /// the usual headroom).
    pub swing_v: f64,
}

impl Default for OpAmpSpec {
    /// A general-purpose audio op-amp of the common kind.
    fn default() -> OpAmpSpec {
        OpAmpSpec {
            model: OpAmpKind::SinglePole,
            gbw_hz: 10e6,
            dc_gain_db: 100.0,
            output_ohm: 0.0,
            swing_v: 10.0,
        }
    }
}

/// An IEC 60063 preferred-number series as a design file names it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub enum SeriesChoice {
    /// 3 values per decade.
    E3,
    /// 6 values per decade.
    E6,
    /// 12 values per decade.
    E12,
    /// 24 values per decade.
    E24,
    /// 48 values per decade.
    E48,
    /// 96 values per decade.
    E96,
    /// 192 values per decade.
    E192,
}

/// How part values scatter within their tolerance in a Monte Carlo run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum SpreadChoice {
    /// Uniform over +-tolerance.
    Uniform,
    /// Gaussian with 3 sigma at the tolerance.
    Gaussian,
}

/// The `[parts]` table: which real parts the build is made of.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PartsSpec {
    /// Series of the resistors (default E96).
    pub resistor_series: SeriesChoice,
    /// Relative tolerance of the resistors (default 0.01).
    pub resistor_tolerance: f64,
    /// Series of the capacitors (default E12).
    pub capacitor_series: SeriesChoice,
    /// Relative tolerance of the capacitors (default 0.05).
    pub capacitor_tolerance: f64,
    /// Capacitances to stay within, farad (default 100 pF to 1 uF).
    pub capacitor_range_f: (f64, f64),
    /// How values scatter in a Monte Carlo run (default uniform).
    pub distribution: SpreadChoice,
}

impl Default for PartsSpec {
    fn default() -> PartsSpec {
        PartsSpec {
            resistor_series: SeriesChoice::E96,
            resistor_tolerance: 0.01,
            capacitor_series: SeriesChoice::E12,
            capacitor_tolerance: 0.05,
            capacitor_range_f: (100e-12, 1e-6),
            distribution: SpreadChoice::Uniform,
        }
    }
}

/// The `[montecarlo]` table.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct MonteCarloSpec {
    /// Number of trials (default 1000).
    pub trials: usize,
    /// Seed of the draws (default 1).
    pub seed: u64,
    /// Relative spread of every op-amp's gain-bandwidth (default 0.3: data
    /// sheets commonly give a typical GBW only, with lots varying by tens
    /// of percent).
    pub gbw_spread: f64,
    /// Extra margin the yield demands inside the passband ripple, dB
    /// (default 0).
    pub passband_margin_db: f64,
    /// Extra margin the yield demands beyond the stopband attenuation, dB
    /// (default 0).
    pub stopband_margin_db: f64,
}

impl Default for MonteCarloSpec {
    fn default() -> MonteCarloSpec {
        MonteCarloSpec {
            trials: 1000,
            seed: 1,
            gbw_spread: 0.3,
            passband_margin_db: 0.0,
            stopband_margin_db: 0.0,
        }
    }
}

/// Largest tolerance or spread a design file may give: beyond 50 % a part
/// is not a part of that value any more.
pub const MAX_TOLERANCE: f64 = 0.5;

/// Most Monte Carlo trials a design file may ask for (a run of this size
/// takes minutes, not hours).
pub const MAX_TRIALS: usize = 10_000_000;

/// A passband or stopband edge: one frequency, or a pair for band kinds.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(untagged)]
pub enum Edge {
    /// Lowpass and highpass.
    Single(f64),
    /// Bandpass and bandstop: `[low, high]`, low < high.
    Pair(f64, f64),
}

/// Where the normalized lowpass prototype comes from.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "source", rename_all = "snake_case")]
pub enum PrototypeSource {
    /// Computed from an approximation family.
    Family {
        /// The family.
        family: FamilyChoice,
        /// The order, when the file fixes it; otherwise the minimum order
        /// for the stopband mask is computed.
        order: Option<usize>,
        /// Passband ripple, or Butterworth edge attenuation, dB.
        passband_ripple_db: f64,
        /// Minimum stopband attenuation, dB (needed for an elliptic
        /// design and for a computed order).
        stopband_attenuation_db: Option<f64>,
    },
    /// Read from a prototype table file (see [`table`]).
    Table {
        /// The table file, resolved against the design file's folder.
        path: PathBuf,
    },
}

pub mod table;

/// A validated design.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Spec {
    /// The design file it came from (for messages).
    pub file: PathBuf,
    /// Lowpass, highpass, bandpass or bandstop.
    pub kind: Kind,
    /// Family and order, or a table.
    pub prototype: PrototypeSource,
    /// Passband edge(s), Hz.
    pub passband_edge_hz: Edge,
    /// Stopband edge(s), Hz, when given.
    pub stopband_edge_hz: Option<Edge>,
    /// The dual form asked for, or `None` to let the pipeline choose.
    pub form: Option<FormChoice>,
    /// Source resistance, ohm.
    pub source_ohm: f64,
    /// Load resistance, ohm.
    pub load_ohm: f64,
    /// How to remove the inductors.
    pub active: ActiveSpec,
    /// The op-amp model the active build is simulated with.
    pub opamp: OpAmpSpec,
    /// The real parts.
    pub parts: PartsSpec,
    /// The Monte Carlo run.
    pub montecarlo: MonteCarloSpec,
}

/// A problem with a design file.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SpecError {
    /// The file could not be read.
    #[error("{}: cannot read the file: {cause}", file.display())]
    Read {
        /// The file.
        file: PathBuf,
        /// Why.
        cause: std::io::Error,
    },
    /// The file is not TOML, has an unknown or missing key, or a value of
    /// the wrong type.
    #[error("{}: line {line}: {message}", file.display())]
    Syntax {
        /// The file.
        file: PathBuf,
        /// 1-based line of the problem.
        line: usize,
        /// The parser's account, which names the key.
        message: String,
    },
    /// A value is out of range or contradicts another.
    #[error("{}: {key} = {got}: {expected}", file.display())]
    Invalid {
        /// The file.
        file: PathBuf,
        /// Dotted key, e.g. `filter.passband_edge_hz`.
        key: &'static str,
        /// The offending value as written.
        got: String,
        /// What would be accepted.
        expected: String,
    },
}

impl Spec {
    /// Reads and validates a design file.
    pub fn load(file: &Path) -> Result<Spec, SpecError> {
        let text = std::fs::read_to_string(file).map_err(|cause| SpecError::Read {
            file: file.to_path_buf(),
            cause,
        })?;
        Spec::from_toml(file, &text)
    }

    /// Validates the text of a design file; `file` is used for messages
    /// and to resolve a prototype table path.
    pub fn from_toml(file: &Path, text: &str) -> Result<Spec, SpecError> {
        raw::parse(file, text)
    }
}

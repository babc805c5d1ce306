//! The design file (TOML): what the designer asks for, validated.
//!
//! Parsing happens in two steps, so that every problem can be reported
//! with the file, the key and what would be accepted: serde reads the raw
//! tables (unknown keys are rejected by name), then [`Spec::from_toml`]
//! checks every value and their relations and builds the plain [`Spec`].
//! Nothing here computes a filter (beyond one conversion: a Bessel
//! lowpass's DC delay or asymptote frequency becomes its passband edge
//! through [`crate::approx::bessel_edge_ratio`]): the file's words are read straight into
//! the types of the stages that use them ([`Band`], [`Family`], [`Form`],
//! [`Method`], [`OpAmpModel`], [`PartsChoice`], [`ImpedanceLevel`]),
//! which each have one spelling for people ([`std::fmt::Display`]) and
//! one for files (serde).

mod raw;

pub use raw::{as_written, HALF_POWER_DB};

use crate::active::{Method, Refine};
use crate::approx::Family;
use crate::circuit::{OpAmpModel, OpAmpNoise};
use crate::parts::{ImpedanceLevel, PartsChoice};
use crate::synth::Form;
use crate::transform::Band;
use std::path::{Path, PathBuf};

/// The `[active]` table.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ActiveSpec {
    /// The realization asked for (default `auto`).
    pub method: Method,
    /// When to compensate the converters and choose their free values
    /// numerically, for the least passband error with the op-amp model:
    /// `optimize` left out is [`Refine::Auto`] (when the balanced build
    /// spends more than [`crate::active::REFINE_FRACTION`] of the ripple),
    /// `true` [`Refine::Always`], `false` [`Refine::Never`].
    pub optimize: Refine,
}

/// The `[opamp]` table.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct OpAmpSpec {
    /// The model every op-amp of the active builds is simulated with
    /// (default single-pole, GBW 10 MHz, A0 100 dB, no output resistance).
    pub model: OpAmpModel,
    /// Largest output swing, V peak (default 10 V, a +-15 V supply less
    /// the usual headroom).
    pub swing_v: f64,
    /// Input noise (default [`DEFAULT_OPAMP_NOISE`]).
    pub noise: OpAmpNoise,
    /// Slew rate, V/s (default 10 V/us).
    pub slew_v_per_s: f64,
    /// Largest output current, A peak (default 10 mA: an assumption of
    /// the same generic op-amp, which drives 1 kohm to its 10 V swing).
    pub output_current_a: f64,
    /// Input bias current, A, into every input (default 100 nA: the
    /// magnitude a bipolar-input low-noise op-amp's data sheet quotes,
    /// as the noise above; a FET-input one draws picoamperes, common
    /// practice).
    pub bias_current_a: f64,
}

/// The input noise of the default op-amp: a generic modern low-noise
/// audio op-amp of this project's choosing, an assumption and not any
/// part's data: 5 nV/sqrt(Hz) with a 1/f corner at 10 Hz, 1 pA/sqrt(Hz)
/// with its corner at 100 Hz (the magnitudes a bipolar-input low-noise
/// op-amp's data sheet quotes, common practice).
pub const DEFAULT_OPAMP_NOISE: OpAmpNoise = OpAmpNoise {
    en_v_per_rthz: 5e-9,
    en_corner_hz: 10.0,
    in_a_per_rthz: 1e-12,
    in_corner_hz: 100.0,
};

impl Default for OpAmpSpec {
    /// A general-purpose audio op-amp of the common kind.
    fn default() -> OpAmpSpec {
        OpAmpSpec {
            model: OpAmpModel::SinglePole {
                dc_gain: 1e5,
                gbw_hz: 10e6,
                output_ohm: 0.0,
            },
            swing_v: 10.0,
            noise: DEFAULT_OPAMP_NOISE,
            slew_v_per_s: 10e6,
            output_current_a: 10e-3,
            bias_current_a: 100e-9,
        }
    }
}

/// How integrated noise is weighted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Weighting {
    /// Every frequency counts alike.
    #[default]
    None,
    /// The A-weighting of IEC 61672-1.
    A,
}

impl std::fmt::Display for Weighting {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Weighting::None => "unweighted",
            Weighting::A => "A-weighted",
        })
    }
}

/// The `[noise]` table: how noise is integrated.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct NoiseSpec {
    /// Temperature of every resistor, K (default 300).
    pub temperature_k: f64,
    /// The band the noise is integrated over, Hz; `None`: the passbands
    /// within the view (see `Design::noise_band_hz`).
    pub band_hz: Option<[f64; 2]>,
    /// The weighting of the integral (default none).
    pub weighting: Weighting,
}

impl Default for NoiseSpec {
    fn default() -> NoiseSpec {
        NoiseSpec {
            temperature_k: 300.0,
            band_hz: None,
            weighting: Weighting::None,
        }
    }
}

/// The `[montecarlo]` table.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct MonteCarloSpec {
    /// Number of trials; `None` when the design file gives none, for
    /// [`crate::design::default_trials`] of the build.
    pub trials: Option<usize>,
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
            trials: None,
            seed: 1,
            gbw_spread: 0.3,
            passband_margin_db: 0.0,
            stopband_margin_db: 0.0,
        }
    }
}

/// Most Monte Carlo trials a design file may ask for. Memory does not
/// grow with the count (the trials stream in blocks; 26 MB peak measured
/// at this count), but time does: 10^7 trials of a 5th-order lowpass on
/// ideal op-amps took 13 minutes of CPU, and a design whose every board's
/// stability is judged (0.35 to 0.6 ms of CPU per trial on the demos)
/// takes one to two hours, shown on the progress bar.
pub const MAX_TRIALS: usize = 10_000_000;

/// A frequency scale other than the passband edge (a Bessel lowpass only):
/// the edge follows from it, the order and the edge loss.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(tag = "by", rename_all = "snake_case")]
pub enum FrequencyScale {
    /// `filter.dc_delay_s`: the group delay at DC.
    DcDelay {
        /// Seconds.
        dc_delay_s: f64,
    },
    /// `filter.asymptote_hz`: where the high-frequency asymptote
    /// (f0/f)^n of |H| reaches 1 (the geometric mean of the natural
    /// frequencies).
    Asymptote {
        /// Hz.
        asymptote_hz: f64,
    },
}

/// Where the normalized lowpass prototype comes from.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "source", rename_all = "snake_case")]
pub enum PrototypeSource {
    /// Computed from an approximation family.
    Family {
        /// The family.
        family: Family,
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
    /// The kind and its passband and stopband edges.
    pub band: Band,
    /// What fixed the passband edge, when the file gave a frequency scale
    /// other than the edge itself.
    pub frequency_scale: Option<FrequencyScale>,
    /// Family and order, or a table.
    pub prototype: PrototypeSource,
    /// The dual form asked for, or `None` to let the pipeline choose.
    pub form: Option<Form>,
    /// Source resistance, ohm.
    pub source_ohm: f64,
    /// Load resistance, ohm.
    pub load_ohm: f64,
    /// Whether the terminations stay as written or are scaled for the
    /// ladder's parts (default fixed).
    pub level: ImpedanceLevel,
    /// How to remove the inductors.
    pub active: ActiveSpec,
    /// The op-amp model the active build is simulated with.
    pub opamp: OpAmpSpec,
    /// The real parts.
    pub parts: PartsChoice,
    /// The Monte Carlo run.
    pub montecarlo: MonteCarloSpec,
    /// A bound on the group-delay spread (the `[delay]` table), if any.
    pub delay: Option<DelaySpec>,
    /// How noise is integrated.
    pub noise: NoiseSpec,
    /// The resolution of the converter after the filter (`[adc] bits`),
    /// for the time to settle within half an LSB.
    pub adc_bits: Option<u32>,
    /// The `[yield]` table: nocoil then chooses the order and the
    /// margins the ladder is synthesized with (see
    /// [`crate::design::design_for_yield`]).
    pub yield_goal: Option<YieldGoal>,
}

/// The `[yield]` table.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct YieldGoal {
    /// The fraction of boards that must meet the specification after
    /// tuning.
    pub target: f64,
    /// How far above the minimum order the search may go (default
    /// [`DEFAULT_EXTRA_ORDER`]).
    pub max_extra_order: usize,
}

/// The default of `yield.max_extra_order`.
pub const DEFAULT_EXTRA_ORDER: usize = 2;

/// The largest `yield.max_extra_order`: each order adds about one
/// converter and a Monte Carlo per margin tried, and a design four orders
/// above its minimum has margin to spare on any tolerance the parts
/// stage accepts (a choice of the project, to keep the search within
/// seconds).
pub const MAX_EXTRA_ORDER: usize = 4;

/// The `[delay]` table: the group-delay spread the boards must keep.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct DelaySpec {
    /// The bound.
    pub bound: SpreadBound,
    /// The bands it holds over, Hz; `None`: the passbands of the view.
    pub bands_hz: Option<Vec<[f64; 2]>>,
}

/// A bound on the longest less the shortest group delay.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SpreadBound {
    /// `delay.max_spread_s`: seconds.
    Seconds(f64),
    /// `delay.max_spread_pct`: percent of the longest delay of the
    /// passive ideal over the bands.
    Percent(f64),
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

//! First step of reading a design file: the raw tables as serde sees them,
//! then the checks that turn them into a [`Spec`].

use super::{
    ActiveSpec, DelaySpec, FrequencyScale, MonteCarloSpec, NoiseSpec, OpAmpSpec, PrototypeSource,
    Spec, SpecError, SpreadBound, Weighting, YieldGoal, DEFAULT_EXTRA_ORDER, MAX_EXTRA_ORDER,
    MAX_TRIALS,
};
use crate::active::{Method, Refine};
use crate::approx::{self, BesselScale, Family};
use crate::circuit::{OpAmpKind, OpAmpModel, OpAmpNoise};
use crate::parts::{Distribution, ImpedanceLevel, PartsChoice, Series, MAX_TOLERANCE};
use crate::synth::{self, Form};
use crate::transform::{check_levels, Band, Kind, MaskField, MaskProblem, TERMINATION_RANGE_OHM};
use serde::Deserialize;
use std::path::Path;

/// The classical half-power point, 10 log10(2) dB: the default attenuation
/// at a Butterworth passband edge.
pub const HALF_POWER_DB: f64 = 3.010_299_956_639_812;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSpec {
    filter: RawFilter,
    terminations: RawTerminations,
    #[serde(default)]
    active: RawActive,
    #[serde(default)]
    opamp: RawOpAmp,
    #[serde(default)]
    parts: RawParts,
    #[serde(default)]
    montecarlo: RawMonteCarlo,
    delay: Option<RawDelay>,
    #[serde(default)]
    noise: RawNoise,
    adc: Option<RawAdc>,
    #[serde(rename = "yield")]
    yield_goal: Option<RawYield>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawYield {
    #[serde(default, deserialize_with = "number")]
    target: Option<f64>,
    max_extra_order: Option<i64>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawNoise {
    #[serde(default, deserialize_with = "number")]
    temperature_k: Option<f64>,
    band_hz: Option<toml::Value>,
    weighting: Option<Weighting>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawAdc {
    bits: Option<i64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDelay {
    #[serde(default, deserialize_with = "number")]
    max_spread_s: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    max_spread_pct: Option<f64>,
    band_hz: Option<toml::Value>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawParts {
    resistor_series: Option<Series>,
    #[serde(default, deserialize_with = "number")]
    resistor_tolerance: Option<f64>,
    capacitor_series: Option<Series>,
    #[serde(default, deserialize_with = "number")]
    capacitor_tolerance: Option<f64>,
    capacitor_range: Option<toml::Value>,
    resistor_range: Option<toml::Value>,
    #[serde(default, deserialize_with = "number")]
    dc_path_max_ohm: Option<f64>,
    distribution: Option<Distribution>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawMonteCarlo {
    trials: Option<i64>,
    seed: Option<i64>,
    #[serde(default, deserialize_with = "number")]
    gbw_spread: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    passband_margin_db: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    stopband_margin_db: Option<f64>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawActive {
    method: Option<Method>,
    optimize: Option<bool>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawOpAmp {
    model: Option<OpAmpKind>,
    #[serde(default, deserialize_with = "number")]
    gbw_hz: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    dc_gain_db: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    second_pole_hz: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    output_ohm: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    swing_v: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    en_v_per_rthz: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    en_corner_hz: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    in_a_per_rthz: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    in_corner_hz: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    slew_v_per_s: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    output_current_a: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    bias_current_a: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFilter {
    kind: Kind,
    family: Option<Family>,
    prototype: Option<String>,
    order: Option<i64>,
    passband_edge_hz: Option<toml::Value>,
    #[serde(default, deserialize_with = "number")]
    dc_delay_s: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    asymptote_hz: Option<f64>,
    stopband_edge_hz: Option<toml::Value>,
    #[serde(default, deserialize_with = "number")]
    passband_ripple_db: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    stopband_attenuation_db: Option<f64>,
    form: Option<Form>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTerminations {
    #[serde(default, deserialize_with = "number")]
    source_ohm: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    load_ohm: Option<f64>,
    level: Option<ImpedanceLevel>,
}

/// Accepts a TOML integer or float where a real number is meant, so that
/// `load_ohm = 600` reads as well as `load_ohm = 600.0`.
pub(super) fn number<'de, D: serde::Deserializer<'de>>(d: D) -> Result<Option<f64>, D::Error> {
    match toml::Value::deserialize(d)? {
        toml::Value::Integer(i) => Ok(Some(i as f64)),
        toml::Value::Float(f) => Ok(Some(f)),
        other => Err(serde::de::Error::custom(format!(
            "expected a number, got {other}"
        ))),
    }
}

/// Builds the error for `key`.
struct Checker<'a> {
    file: &'a Path,
}

impl Checker<'_> {
    fn invalid(
        &self,
        key: &'static str,
        got: impl ToString,
        expected: impl Into<String>,
    ) -> SpecError {
        SpecError::Invalid {
            file: self.file.to_path_buf(),
            key,
            got: got.to_string(),
            expected: expected.into(),
        }
    }

    fn positive(&self, key: &'static str, v: f64, what: &str) -> Result<f64, SpecError> {
        if v.is_finite() && v > 0.0 {
            Ok(v)
        } else {
            Err(self.invalid(key, v, format!("expected {what} greater than 0")))
        }
    }

    /// `v` within `(lo, hi)`, both included; the message names the range.
    fn within(
        &self,
        key: &'static str,
        v: f64,
        (lo, hi): (f64, f64),
        what: &str,
    ) -> Result<f64, SpecError> {
        if (lo..=hi).contains(&v) {
            Ok(v)
        } else {
            Err(self.invalid(key, v, format!("expected {what} from {lo:e} to {hi:e}")))
        }
    }

    fn required(&self, key: &'static str, v: Option<f64>, what: &str) -> Result<f64, SpecError> {
        let v = v.ok_or_else(|| self.invalid(key, "(missing)", format!("expected {what}")))?;
        self.positive(key, v, what)
    }

    /// A termination, in [`TERMINATION_RANGE_OHM`].
    fn termination(&self, key: &'static str, v: Option<f64>) -> Result<f64, SpecError> {
        let v = self.required(key, v, "a resistance in ohm")?;
        self.within(key, v, TERMINATION_RANGE_OHM, "a resistance in ohm")
    }

    /// Edges as written: one number, or an array of numbers; their shape
    /// is checked against the kind by [`Band::new`].
    fn edges(&self, key: &'static str, v: &toml::Value) -> Result<Vec<f64>, SpecError> {
        let as_f64 = |x: &toml::Value| match x {
            toml::Value::Integer(i) => Some(*i as f64),
            toml::Value::Float(f) => Some(*f),
            _ => None,
        };
        let edges = match v {
            toml::Value::Array(a) => a.iter().map(as_f64).collect(),
            x => as_f64(x).map(|f| vec![f]),
        };
        edges.ok_or_else(|| {
            self.invalid(
                key,
                v,
                "expected a frequency in Hz, or [low, high] for a band kind",
            )
        })
    }

    /// A mask problem under the design file's key names.
    fn problem(&self, p: MaskProblem) -> SpecError {
        let key = match p.field {
            MaskField::Passband => KEY_PASSBAND,
            MaskField::Stopband => "filter.stopband_edge_hz",
            MaskField::Ripple => "filter.passband_ripple_db",
            MaskField::Attenuation => "filter.stopband_attenuation_db",
        };
        self.invalid(key, p.got, p.expected)
    }
}

const KEY_PASSBAND: &str = "filter.passband_edge_hz";

pub(super) fn syntax_error(file: &Path, text: &str, e: toml::de::Error) -> SpecError {
    let start = e.span().map_or(0, |s| s.start.min(text.len()));
    let line = text[..start].matches('\n').count() + 1;
    // The parser names unknown and missing keys itself; for a value of the
    // wrong type it does not, so the key is read off the offending line.
    let line_text = text.lines().nth(line - 1).unwrap_or("");
    let key = line_text
        .split_once('=')
        .map(|(k, _)| k.trim())
        .filter(|k| !k.is_empty() && !k.starts_with('['));
    let message = e
        .message()
        .trim()
        .replace('\n', " ")
        .replace("expected i64", "expected a whole number")
        .replace("expected f64", "expected a number");
    SpecError::Syntax {
        file: file.to_path_buf(),
        line,
        message: match key {
            Some(k) if !message.contains(k) => format!("{k}: {message}"),
            _ => message,
        },
    }
}

pub(super) fn parse(file: &Path, text: &str) -> Result<Spec, SpecError> {
    let raw: RawSpec = toml::from_str(text).map_err(|e| syntax_error(file, text, e))?;
    let c = Checker { file };
    let f = raw.filter;
    let stopband = match &f.stopband_edge_hz {
        Some(v) => Some(c.edges("filter.stopband_edge_hz", v)?),
        None => None,
    };
    let prototype = prototype_source(&c, &f, stopband.is_some())?;
    let (passband, frequency_scale) = passband_edges(&c, &f, &prototype)?;
    let band = Band::new(f.kind, &passband, stopband.as_deref()).map_err(|p| c.problem(p))?;
    let source_ohm = c.termination("terminations.source_ohm", raw.terminations.source_ohm)?;
    let load_ohm = c.termination("terminations.load_ohm", raw.terminations.load_ohm)?;
    let opamp = opamp(&c, &raw.opamp)?;
    let parts = parts(&c, &raw.parts)?;
    let montecarlo = montecarlo(&c, &raw.montecarlo)?;
    let delay = match &raw.delay {
        Some(d) => Some(delay(&c, d)?),
        None => None,
    };
    let noise = noise(&c, &raw.noise)?;
    let adc_bits = match &raw.adc {
        None => None,
        Some(RawAdc { bits: Some(n) }) if ADC_BITS.contains(n) => Some(*n as u32),
        Some(RawAdc { bits }) => {
            return Err(c.invalid(
                "adc.bits",
                bits.map_or("(missing)".to_string(), |n| n.to_string()),
                format!(
                    "expected the converter's resolution, a whole number of bits from {} to {}",
                    ADC_BITS.start(),
                    ADC_BITS.end()
                ),
            ))
        }
    };
    let yield_goal = match &raw.yield_goal {
        Some(y) => Some(yield_goal(&c, y, &prototype)?),
        None => None,
    };
    // The passband margin tightens the ripple limit; at or beyond the
    // ripple the limit would sit above the passband level, which no
    // board reaches.
    if let PrototypeSource::Family {
        passband_ripple_db, ..
    } = prototype
    {
        if montecarlo.passband_margin_db >= passband_ripple_db {
            return Err(c.invalid(
                "montecarlo.passband_margin_db",
                montecarlo.passband_margin_db,
                format!("expected a margin below the passband ripple ({passband_ripple_db} dB)"),
            ));
        }
    }
    Ok(Spec {
        file: file.to_path_buf(),
        band,
        frequency_scale,
        prototype,
        form: f.form,
        source_ohm,
        load_ohm,
        level: raw.terminations.level.unwrap_or_default(),
        active: ActiveSpec {
            method: raw.active.method.unwrap_or(Method::Auto),
            optimize: match raw.active.optimize {
                None => Refine::Auto,
                Some(true) => Refine::Always,
                Some(false) => Refine::Never,
            },
        },
        opamp,
        parts,
        montecarlo,
        delay,
        noise,
        adc_bits,
        yield_goal,
    })
}

/// The `[yield]` table: a fraction strictly between 0 and 1 (a target of
/// 1 no finite Monte Carlo can confirm), and at most
/// [`MAX_EXTRA_ORDER`] orders above the minimum; a prototype table fixes
/// the ladder, so there is nothing to search.
fn yield_goal(
    c: &Checker,
    raw: &RawYield,
    prototype: &PrototypeSource,
) -> Result<YieldGoal, SpecError> {
    if let PrototypeSource::Table { .. } = prototype {
        return Err(c.invalid(
            "yield",
            "(a table)",
            "expected no [yield] table beside filter.prototype: a prototype table fixes the ladder, so there is no order or margin to choose; give a family instead",
        ));
    }
    let target = match raw.target {
        Some(t) if t > 0.0 && t < 1.0 => t,
        got => {
            return Err(c.invalid(
                "yield.target",
                got.map_or("(missing)".to_string(), |t| t.to_string()),
                "expected the fraction of boards that must meet the specification, above 0 and below 1 (0.99 is 99 %)",
            ))
        }
    };
    let max_extra_order = match raw.max_extra_order {
        None => DEFAULT_EXTRA_ORDER,
        Some(n) if (0..=MAX_EXTRA_ORDER as i64).contains(&n) => n as usize,
        Some(n) => {
            return Err(c.invalid(
                "yield.max_extra_order",
                n,
                format!("expected a whole number from 0 to {MAX_EXTRA_ORDER}"),
            ))
        }
    };
    Ok(YieldGoal {
        target,
        max_extra_order,
    })
}

/// Converter resolutions `[adc] bits` may give: half an LSB of 32 bits
/// is 1e-10 of full scale, beyond any analog filter's settling.
const ADC_BITS: std::ops::RangeInclusive<i64> = 1..=32;

/// Temperatures `[noise] temperature_k` may give, K: from liquid helium
/// to well beyond any component's rating.
const TEMPERATURE_RANGE_K: (f64, f64) = (1.0, 1000.0);

/// The band a noise integral or a delay bound may span, Hz: a noise band
/// reaching 1e300 Hz made the network's equations singular in a double,
/// one from 5e-324 Hz overflowed the grid (a trial as a new user), and a
/// delay band to 1e300 Hz made the Monte Carlo's first board singular
/// (the generative test, seed 10); a filter's bands of interest lie far
/// inside these. A delay band may also start at DC.
const BAND_LIMITS_HZ: (f64, f64) = (1e-6, 1e10);

/// The `[noise]` table.
fn noise(c: &Checker, raw: &RawNoise) -> Result<NoiseSpec, SpecError> {
    let d = NoiseSpec::default();
    let temperature_k = match raw.temperature_k {
        None => d.temperature_k,
        Some(t) => c.within(
            "noise.temperature_k",
            t,
            TEMPERATURE_RANGE_K,
            "a temperature in kelvin",
        )?,
    };
    let band_hz = match &raw.band_hz {
        None => None,
        Some(v) => match c.edges("noise.band_hz", v)?.as_slice() {
            &[lo, hi] if lo >= BAND_LIMITS_HZ.0 && lo < hi && hi <= BAND_LIMITS_HZ.1 => {
                Some([lo, hi])
            }
            _ => {
                return Err(c.invalid(
                    "noise.band_hz",
                    v,
                    format!(
                        "expected [low, high] in Hz with {:e} <= low < high <= {:e}",
                        BAND_LIMITS_HZ.0, BAND_LIMITS_HZ.1
                    ),
                ))
            }
        },
    };
    Ok(NoiseSpec {
        temperature_k,
        band_hz,
        weighting: raw.weighting.unwrap_or(d.weighting),
    })
}

/// Most a spread may be of the longest delay, percent: beyond 100 % any
/// response keeps it.
const MAX_SPREAD_PCT: f64 = 100.0;

/// The `[delay]` table: one bound, and the bands it holds over.
fn delay(c: &Checker, raw: &RawDelay) -> Result<DelaySpec, SpecError> {
    let bound = match (raw.max_spread_s, raw.max_spread_pct) {
        (Some(s), None) => SpreadBound::Seconds(c.positive("delay.max_spread_s", s, "a spread in seconds")?),
        (None, Some(p)) if p > 0.0 && p < MAX_SPREAD_PCT => SpreadBound::Percent(p),
        (None, Some(p)) => {
            return Err(c.invalid(
                "delay.max_spread_pct",
                p,
                format!("expected a percentage of the longest delay above 0 and below {MAX_SPREAD_PCT}"),
            ))
        }
        (Some(_), Some(_)) => {
            return Err(c.invalid(
                "delay.max_spread_pct",
                "(given too)",
                "expected one of delay.max_spread_s and delay.max_spread_pct",
            ))
        }
        (None, None) => {
            return Err(c.invalid(
                "delay.max_spread_s",
                "(missing)",
                "expected delay.max_spread_s (seconds) or delay.max_spread_pct (percent of the longest delay)",
            ))
        }
    };
    let bands_hz = match &raw.band_hz {
        None => None,
        Some(v) => {
            let edges = c.edges("delay.band_hz", v)?;
            let band = match edges[..] {
                [to] => [0.0, to],
                [from, to] => [from, to],
                _ => [f64::NAN; 2],
            };
            let (lowest, highest) = BAND_LIMITS_HZ;
            let low_ok = band[0] == 0.0 || band[0] >= lowest;
            if !(low_ok && band[0] < band[1] && band[1] <= highest) {
                return Err(c.invalid(
                    "delay.band_hz",
                    v,
                    format!("expected the top of a band from DC in Hz, or [low, high] with low = 0 or {lowest:e} <= low < high <= {highest:e}"),
                ));
            }
            Some(vec![band])
        }
    };
    Ok(DelaySpec { bound, bands_hz })
}

/// DC delays a design file may give, seconds: a picosecond to a day
/// (filters beyond either end are not built from op-amps and capacitors;
/// the edge they give must still pass the band's own range check).
const DC_DELAY_RANGE_S: (f64, f64) = (1e-12, 86_400.0);

/// The passband edges, as written or from a Bessel lowpass's other
/// frequency scale (a DC group delay or an asymptote frequency, which fix
/// the edge with the order and edge loss).
fn passband_edges(
    c: &Checker,
    f: &RawFilter,
    prototype: &PrototypeSource,
) -> Result<(Vec<f64>, Option<FrequencyScale>), SpecError> {
    const KEYS: [&str; 3] = [KEY_PASSBAND, "filter.dc_delay_s", "filter.asymptote_hz"];
    let given = [
        f.passband_edge_hz.is_some(),
        f.dc_delay_s.is_some(),
        f.asymptote_hz.is_some(),
    ];
    if let Some(second) = (0..3).filter(|&i| given[i]).nth(1) {
        return Err(c.invalid(
            KEYS[second],
            "(given too)",
            "expected exactly one of filter.passband_edge_hz, filter.dc_delay_s and filter.asymptote_hz: each fixes the frequency scale",
        ));
    }
    let (key, scale) = match (&f.passband_edge_hz, f.dc_delay_s, f.asymptote_hz) {
        (Some(v), _, _) => return Ok((c.edges(KEY_PASSBAND, v)?, None)),
        (None, Some(t), _) => (
            "filter.dc_delay_s",
            FrequencyScale::DcDelay {
                dc_delay_s: c.within("filter.dc_delay_s", t, DC_DELAY_RANGE_S, "a delay in seconds")?,
            },
        ),
        (None, None, Some(f0)) => (
            "filter.asymptote_hz",
            FrequencyScale::Asymptote {
                asymptote_hz: c.positive("filter.asymptote_hz", f0, "a frequency in Hz")?,
            },
        ),
        (None, None, None) => {
            return Err(c.invalid(
                KEY_PASSBAND,
                "(missing)",
                "expected a frequency in Hz, or [low, high] for a band kind (a Bessel lowpass may give filter.dc_delay_s or filter.asymptote_hz instead)",
            ))
        }
    };
    let got = match scale {
        FrequencyScale::DcDelay { dc_delay_s } => dc_delay_s,
        FrequencyScale::Asymptote { asymptote_hz } => asymptote_hz,
    };
    let (family, order, ripple) = match prototype {
        PrototypeSource::Family {
            family,
            order,
            passband_ripple_db,
            ..
        } => (Some(*family), *order, *passband_ripple_db),
        PrototypeSource::Table { .. } => (None, None, 0.0),
    };
    if family != Some(Family::Bessel) || f.kind != Kind::Lowpass {
        return Err(c.invalid(
            key,
            got,
            "expected filter.passband_edge_hz instead: a DC delay or an asymptote fixes the frequency scale of a Bessel lowpass only (kind = \"lowpass\", family = \"bessel\")",
        ));
    }
    let Some(order) = order else {
        return Err(c.invalid(
            "filter.order",
            "(missing)",
            format!(
                "expected an order with {key}: the passband edge it fixes depends on the order"
            ),
        ));
    };
    let (approx_scale, per) = match scale {
        FrequencyScale::DcDelay { dc_delay_s } => (
            BesselScale::DcDelay,
            1.0 / (std::f64::consts::TAU * dc_delay_s),
        ),
        FrequencyScale::Asymptote { asymptote_hz } => (BesselScale::Asymptote, asymptote_hz),
    };
    let ratio = approx::bessel_edge_ratio(order, ripple, approx_scale).map_err(|e| {
        c.invalid(
            key,
            got,
            format!("expected a scale the Bessel approximation can take ({e})"),
        )
    })?;
    Ok((vec![ratio * per], Some(scale)))
}

/// A relative tolerance or spread in [0, MAX_TOLERANCE].
fn fraction(
    c: &Checker,
    key: &'static str,
    v: Option<f64>,
    default: f64,
) -> Result<f64, SpecError> {
    match v {
        None => Ok(default),
        Some(x) if (0.0..=MAX_TOLERANCE).contains(&x) => Ok(x),
        Some(x) => Err(c.invalid(
            key,
            x,
            format!("expected a fraction from 0 to {MAX_TOLERANCE} (0.01 is 1 %)"),
        )),
    }
}

/// The capacitor range a design file may set, farad: from 1 fF (below
/// any part's own stray capacitance) to 1 F; a range of 5e-324 F could
/// not be snapped to any preferred value.
const CAPACITOR_RANGE_LIMITS_F: (f64, f64) = (1e-15, 1.0);

/// The op-amp frequencies a design file may give (GBW and second pole),
/// Hz. Up to 1e14 (the near-ideal 10 THz models of the tests, ten times
/// over): beyond it the top of the op-amp range (GBW / 10) left what the
/// solver holds (the generative test found a singular system at 8e16 Hz).
/// From 1 Hz, below any op-amp made: a GBW or second pole of 5e-324 Hz
/// made the circuit equations singular (generative test, seed 2, cases
/// 54630 and 35052).
const OPAMP_FREQUENCY_RANGE_HZ: (f64, f64) = (1.0, 1e14);

/// The output swings a design file may give, V peak: a swing of 1.8e308
/// V made the largest input infinite (generative test, seed 2, case
/// 72397); real op-amps swing from millivolts to a few hundred volts.
const SWING_RANGE_V: (f64, f64) = (1e-3, 1e4);

/// The resistor values a design file may give (`parts.resistor_range`,
/// `parts.dc_path_max_ohm`), ohm: from a milliohm (below any resistor a
/// filter uses) to 1 Tohm (above any a board's leakage lets work).
const RESISTOR_RANGE_LIMITS_OHM: (f64, f64) = (1e-3, 1e12);

/// A `[low, high]` range of `key` within `(min, max)`, in `unit`, or
/// `default` when not given.
fn range(
    c: &Checker,
    key: &'static str,
    given: Option<&toml::Value>,
    (min, max): (f64, f64),
    unit: &str,
    example: &str,
    default: (f64, f64),
) -> Result<(f64, f64), SpecError> {
    let Some(v) = given else {
        return Ok(default);
    };
    let pair = match v {
        toml::Value::Array(a) if a.len() == 2 => {
            let number = |x: &toml::Value| x.as_float().or(x.as_integer().map(|i| i as f64));
            number(&a[0]).zip(number(&a[1]))
        }
        _ => None,
    };
    match pair {
        Some((lo, hi)) if min <= lo && lo < hi && hi <= max => Ok((lo, hi)),
        _ => Err(c.invalid(
            key,
            v,
            format!("expected [low, high] in {unit} with {min:e} <= low < high <= {max:e}, e.g. {example}"),
        )),
    }
}

fn parts(c: &Checker, raw: &RawParts) -> Result<PartsChoice, SpecError> {
    let d = PartsChoice::default();
    let capacitor_range_f = range(
        c,
        "parts.capacitor_range",
        raw.capacitor_range.as_ref(),
        CAPACITOR_RANGE_LIMITS_F,
        "farad",
        "[100e-12, 1e-6]",
        d.capacitor_range_f,
    )?;
    let resistor_range_ohm = range(
        c,
        "parts.resistor_range",
        raw.resistor_range.as_ref(),
        RESISTOR_RANGE_LIMITS_OHM,
        "ohm",
        "[100, 1e6]",
        d.resistor_range_ohm,
    )?;
    let (min, max) = RESISTOR_RANGE_LIMITS_OHM;
    let dc_path_max_ohm = match raw.dc_path_max_ohm {
        None => d.dc_path_max_ohm,
        Some(ohm) if (min..=max).contains(&ohm) => ohm,
        Some(ohm) => {
            return Err(c.invalid(
                "parts.dc_path_max_ohm",
                ohm,
                format!("expected ohm with {min:e} <= value <= {max:e}, e.g. 10e6"),
            ))
        }
    };
    Ok(PartsChoice {
        resistor_series: raw.resistor_series.unwrap_or(d.resistor_series),
        resistor_tolerance: fraction(
            c,
            "parts.resistor_tolerance",
            raw.resistor_tolerance,
            d.resistor_tolerance,
        )?,
        capacitor_series: raw.capacitor_series.unwrap_or(d.capacitor_series),
        capacitor_tolerance: fraction(
            c,
            "parts.capacitor_tolerance",
            raw.capacitor_tolerance,
            d.capacitor_tolerance,
        )?,
        capacitor_range_f,
        capacitor_range_given: raw.capacitor_range.is_some(),
        resistor_range_ohm,
        resistor_range_given: raw.resistor_range.is_some(),
        dc_path_max_ohm,
        distribution: raw.distribution.unwrap_or(d.distribution),
    })
}

fn montecarlo(c: &Checker, raw: &RawMonteCarlo) -> Result<MonteCarloSpec, SpecError> {
    let d = MonteCarloSpec::default();
    let trials = match raw.trials {
        None => d.trials,
        Some(n) if (1..=MAX_TRIALS as i64).contains(&n) => Some(n as usize),
        Some(n) => {
            return Err(c.invalid(
                "montecarlo.trials",
                n,
                format!("expected a whole number from 1 to {MAX_TRIALS}"),
            ))
        }
    };
    let seed = match raw.seed {
        None => d.seed,
        Some(s) if s >= 0 => s as u64,
        Some(s) => {
            return Err(c.invalid("montecarlo.seed", s, "expected a whole number, 0 or more"))
        }
    };
    let margin = |key: &'static str, v: Option<f64>| match v {
        None => Ok(0.0),
        Some(x) if x.is_finite() && x >= 0.0 => Ok(x),
        Some(x) => Err(c.invalid(key, x, "expected a margin in dB, 0 or more")),
    };
    Ok(MonteCarloSpec {
        trials,
        seed,
        gbw_spread: fraction(c, "montecarlo.gbw_spread", raw.gbw_spread, d.gbw_spread)?,
        passband_margin_db: margin("montecarlo.passband_margin_db", raw.passband_margin_db)?,
        stopband_margin_db: margin("montecarlo.stopband_margin_db", raw.stopband_margin_db)?,
    })
}

/// The op-amp model: every key optional, defaults documented on
/// [`OpAmpSpec`].
fn opamp(c: &Checker, raw: &RawOpAmp) -> Result<OpAmpSpec, SpecError> {
    let d = OpAmpSpec::default();
    let (default_gbw_hz, default_dc_gain_db, default_output_ohm) = match d.model {
        OpAmpModel::SinglePole {
            dc_gain,
            gbw_hz,
            output_ohm,
        }
        | OpAmpModel::TwoPole {
            dc_gain,
            gbw_hz,
            output_ohm,
            ..
        } => (gbw_hz, 20.0 * dc_gain.log10(), output_ohm),
        OpAmpModel::Ideal => (f64::INFINITY, f64::INFINITY, 0.0),
    };
    let gbw_hz = match raw.gbw_hz {
        None => default_gbw_hz,
        Some(v) => c.within(
            "opamp.gbw_hz",
            v,
            OPAMP_FREQUENCY_RANGE_HZ,
            "a gain-bandwidth product in Hz",
        )?,
    };
    let dc_gain_db = match raw.dc_gain_db {
        None => default_dc_gain_db,
        Some(v) if (MIN_DC_GAIN_DB..=MAX_DC_GAIN_DB).contains(&v) => v,
        Some(v) => {
            return Err(c.invalid(
                "opamp.dc_gain_db",
                v,
                format!(
                "expected an open-loop DC gain in dB, greater than 0: from {MIN_DC_GAIN_DB} to {MAX_DC_GAIN_DB}"
            ),
            ))
        }
    };
    let output_ohm = match raw.output_ohm {
        None => default_output_ohm,
        Some(v) if v == 0.0 || (OUTPUT_OHM_RANGE.0..=OUTPUT_OHM_RANGE.1).contains(&v) => v,
        Some(v) => {
            return Err(c.invalid(
                "opamp.output_ohm",
                v,
                format!(
                    "expected an output resistance in ohm: 0, or from {:e} to {:e}",
                    OUTPUT_OHM_RANGE.0, OUTPUT_OHM_RANGE.1
                ),
            ))
        }
    };
    let swing_v = match raw.swing_v {
        None => d.swing_v,
        Some(v) => c.within(
            "opamp.swing_v",
            v,
            SWING_RANGE_V,
            "an output swing in V peak",
        )?,
    };
    let kind = raw.model.unwrap_or(d.model.kind());
    // Only the two-pole model has a second pole, and it has no default:
    // where it sits decides the phase margin. The other models read none
    // (a single-pole model is one with its second pole at infinity).
    let second_pole_hz = match (kind, raw.second_pole_hz) {
        (OpAmpKind::TwoPole, v) => {
            let v = c.required("opamp.second_pole_hz", v, "a second pole in Hz")?;
            c.within(
                "opamp.second_pole_hz",
                v,
                OPAMP_FREQUENCY_RANGE_HZ,
                "a second pole in Hz",
            )?
        }
        (_, None) => f64::INFINITY,
        (_, Some(v)) => {
            return Err(c.invalid(
                "opamp.second_pole_hz",
                v,
                format!(
                "expected no second pole with model = \"{}\"; only model = \"two_pole\" has one",
                as_written(&kind)
            ),
            ))
        }
    };
    let density =
        |key: &'static str, v: Option<f64>, default: f64, range: (f64, f64), what: &str| match v {
            None => Ok(default),
            Some(v) => c.within(key, v, range, what),
        };
    let noise = OpAmpNoise {
        en_v_per_rthz: density(
            "opamp.en_v_per_rthz",
            raw.en_v_per_rthz,
            d.noise.en_v_per_rthz,
            EN_RANGE,
            "an input voltage noise density in V/sqrt(Hz)",
        )?,
        en_corner_hz: density(
            "opamp.en_corner_hz",
            raw.en_corner_hz,
            d.noise.en_corner_hz,
            CORNER_RANGE_HZ,
            "a 1/f corner in Hz",
        )?,
        in_a_per_rthz: density(
            "opamp.in_a_per_rthz",
            raw.in_a_per_rthz,
            d.noise.in_a_per_rthz,
            IN_RANGE,
            "an input current noise density in A/sqrt(Hz)",
        )?,
        in_corner_hz: density(
            "opamp.in_corner_hz",
            raw.in_corner_hz,
            d.noise.in_corner_hz,
            CORNER_RANGE_HZ,
            "a 1/f corner in Hz",
        )?,
    };
    let slew_v_per_s = density(
        "opamp.slew_v_per_s",
        raw.slew_v_per_s,
        d.slew_v_per_s,
        SLEW_RANGE_V_PER_S,
        "a slew rate in V/s",
    )?;
    let output_current_a = density(
        "opamp.output_current_a",
        raw.output_current_a,
        d.output_current_a,
        OUTPUT_CURRENT_RANGE_A,
        "a largest output current in A",
    )?;
    let bias_current_a = density(
        "opamp.bias_current_a",
        raw.bias_current_a,
        d.bias_current_a,
        BIAS_RANGE_A,
        "an input bias current in A",
    )?;
    Ok(OpAmpSpec {
        model: OpAmpModel::from_data_sheet(kind, gbw_hz, dc_gain_db, second_pole_hz, output_ohm),
        swing_v,
        noise,
        slew_v_per_s,
        output_current_a,
        bias_current_a,
    })
}

/// Input bias currents a design file may give, A: 0 (none) to 1 mA, far
/// above any op-amp's.
const BIAS_RANGE_A: (f64, f64) = (0.0, 1e-3);

/// Input voltage noise densities a design file may give, V/sqrt(Hz): 0
/// (noiseless) to 1 uV/sqrt(Hz), far above any op-amp's.
const EN_RANGE: (f64, f64) = (0.0, 1e-6);

/// Input current noise densities, A/sqrt(Hz): 0 to 1 nA/sqrt(Hz).
const IN_RANGE: (f64, f64) = (0.0, 1e-9);

/// 1/f corners, Hz: 0 (white to DC) to 1 MHz.
const CORNER_RANGE_HZ: (f64, f64) = (0.0, 1e6);

/// Slew rates, V/s: 1 V/ms to 100 V/ns.
const SLEW_RANGE_V_PER_S: (f64, f64) = (1e3, 1e11);

/// Largest output currents, A: 1 uA (a micropower op-amp) to 10 A (a
/// power op-amp), both far beyond a signal filter's.
const OUTPUT_CURRENT_RANGE_A: (f64, f64) = (1e-6, 10.0);

/// Open-loop gains beyond this (1e10) are indistinguishable from an ideal
/// op-amp in double precision and usually a typing slip.
const MAX_DC_GAIN_DB: f64 = 200.0;

/// Least open-loop DC gain, dB: an op-amp of gain 10 no longer makes a
/// converter (a gain of 5e-324 dB, which is 1, made the network
/// singular, found by the generative test).
const MIN_DC_GAIN_DB: f64 = 20.0;

/// Output resistances other than 0 a design file may give, ohm: a
/// resistance of 1e-300 ohm is a conductance no double solves beside the
/// others (the generative test found the system singular), and a real
/// op-amp lies between these.
const OUTPUT_OHM_RANGE: (f64, f64) = (1e-3, 1e6);

fn prototype_source(
    c: &Checker,
    f: &RawFilter,
    has_stopband: bool,
) -> Result<PrototypeSource, SpecError> {
    if let Some(table) = &f.prototype {
        if let Some(family) = f.family {
            return Err(c.invalid(
                "filter.family",
                as_written(&family),
                "expected no family when filter.prototype names a table (the table fixes it)",
            ));
        }
        let dir = c.file.parent().unwrap_or(Path::new("."));
        return Ok(PrototypeSource::Table {
            path: dir.join(table),
        });
    }
    let family = f.family.ok_or_else(|| {
        c.invalid(
            "filter.family",
            "(missing)",
            format!(
                "expected {} (or filter.prototype naming a table)",
                family_names()
            ),
        )
    })?;
    let max = synth::max_order(family);
    let order = match f.order {
        Some(n) if (1..=max as i64).contains(&n) => Some(n as usize),
        Some(n) => {
            return Err(c.invalid(
                "filter.order",
                n,
                if family.finite_zeros() {
                    format!(
                        "expected a whole number from 1 to {max} (at most {max} for an {family} ladder: its synthesis holds its accuracy no further)"
                    )
                } else {
                    format!("expected a whole number from 1 to {max}")
                },
            ))
        }
        None if has_stopband => None,
        None => {
            return Err(c.invalid(
                "filter.order",
                "(missing)",
                format!(
                    "expected an order from 1 to {max}, or filter.stopband_edge_hz to compute it"
                ),
            ))
        }
    };
    let ripple = match (family.equiripple_passband(), f.passband_ripple_db) {
        // The monotonic passbands are normalized at the half-power point
        // unless the file says otherwise.
        (false, None) => HALF_POWER_DB,
        (_, None) => {
            return Err(c.invalid(
                "filter.passband_ripple_db",
                "(missing)",
                "expected a passband ripple in dB",
            ))
        }
        (_, Some(r)) => r,
    };
    check_levels(ripple, f.stopband_attenuation_db).map_err(|p| c.problem(p))?;
    let needs_attenuation = family.finite_zeros() || order.is_none();
    if needs_attenuation && f.stopband_attenuation_db.is_none() {
        return Err(c.invalid(
            "filter.stopband_attenuation_db",
            "(missing)",
            "expected a minimum stopband attenuation in dB (an elliptic or inverse Chebyshev design, or a computed order, needs it)",
        ));
    }
    Ok(PrototypeSource::Family {
        family,
        order,
        passband_ripple_db: ripple,
        stopband_attenuation_db: f.stopband_attenuation_db,
    })
}

/// Every family as a design file names it: "butterworth, ... or legendre".
fn family_names() -> String {
    let names: Vec<String> = crate::approx::FAMILIES.iter().map(as_written).collect();
    match names.split_last() {
        Some((last, rest)) => format!("{} or {last}", rest.join(", ")),
        None => String::new(),
    }
}

/// A value as a design file writes it (its serde name): for messages that
/// quote the file, and the data spelling CSV and JSON use
/// (`active_on_parts`, `butterworth`).
pub fn as_written<T: serde::Serialize>(value: &T) -> String {
    match toml::Value::try_from(value) {
        Ok(toml::Value::String(s)) => s,
        Ok(other) => other.to_string(),
        Err(_) => String::from("(unprintable)"),
    }
}

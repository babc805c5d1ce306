//! Prototype tables: a normalized lowpass ladder written out element by
//! element (from a handbook, or derived elsewhere), that a design file can
//! name with `filter.prototype` instead of a computed family.
//!
//! Normalization: source resistance 1 ohm, passband edge 1 rad/s, values
//! in henry and farad. The arms run from the source to the load; each
//! `[[arm]]` holds exactly one of the keys below.
//!
//! ```toml
//! description = "Chebyshev 0.5 dB, order 3, equal terminations"
//! reference = "where the numbers come from"
//! family = "chebyshev"          # optional: what generated the values
//! order = 3
//! passband_ripple_db = 0.5
//! load_ohm = 1.0
//! [[arm]]
//! series_l = 1.5963             # inductor in a series arm
//! [[arm]]
//! shunt_c = 1.0967              # capacitor from the node to ground
//! # also: series_tank = [l, c]  (parallel LC in a series arm)
//! #       shunt_resonator = [l, c]  (series LC from the node to ground)
//! ```

use super::raw::{number, syntax_error};
use super::SpecError;
use crate::approx::{Family, MAX_ORDER};
use crate::synth::ArmValues;
use serde::Deserialize;
use std::path::{Path, PathBuf};

/// A tabulated normalized lowpass prototype.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PrototypeTable {
    /// The file it was read from.
    pub file: PathBuf,
    /// One line saying what it is.
    pub description: String,
    /// Where the values come from (book, table, "from memory").
    pub reference: String,
    /// The family that generated the values, when known.
    pub family: Option<Family>,
    /// Number of reactive elements.
    pub order: usize,
    /// Passband ripple (or Butterworth edge attenuation), dB.
    pub passband_ripple_db: f64,
    /// Stopband attenuation, dB, for an elliptic table.
    pub stopband_attenuation_db: Option<f64>,
    /// Load resistance, ohm (source = 1 ohm).
    pub load_ohm: f64,
    /// The arms, from source to load.
    pub arms: Vec<ArmValues>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTable {
    description: String,
    reference: String,
    family: Option<Family>,
    order: usize,
    #[serde(deserialize_with = "number")]
    passband_ripple_db: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    stopband_attenuation_db: Option<f64>,
    #[serde(deserialize_with = "number")]
    load_ohm: Option<f64>,
    arm: Vec<RawArm>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawArm {
    #[serde(default, deserialize_with = "number")]
    series_l: Option<f64>,
    #[serde(default, deserialize_with = "number")]
    shunt_c: Option<f64>,
    series_tank: Option<[f64; 2]>,
    shunt_resonator: Option<[f64; 2]>,
}

/// The normalized element values and load a table may hold.
const TABLE_VALUE_RANGE: (f64, f64) = (1e-6, 1e6);

impl PrototypeTable {
    /// Reads and checks a table file.
    pub fn load(file: &Path) -> Result<PrototypeTable, SpecError> {
        let text = std::fs::read_to_string(file).map_err(|cause| SpecError::Read {
            file: file.to_path_buf(),
            cause,
        })?;
        let raw: RawTable = toml::from_str(&text).map_err(|e| syntax_error(file, &text, e))?;
        let invalid = |key: &'static str, got: String, expected: &str| SpecError::Invalid {
            file: file.to_path_buf(),
            key,
            got,
            expected: expected.to_string(),
        };
        // Normalized element values (1 ohm, 1 rad/s) of any realizable
        // prototype lie far inside this; beyond it a scaled element
        // rounds to 0 or to infinity (an arm of 5e-324 H did).
        let positive = |v: f64| (TABLE_VALUE_RANGE.0..=TABLE_VALUE_RANGE.1).contains(&v);
        let mut arms = Vec::with_capacity(raw.arm.len());
        for (i, a) in raw.arm.iter().enumerate() {
            let arm = match (a.series_l, a.shunt_c, a.series_tank, a.shunt_resonator) {
                (Some(l), None, None, None) if positive(l) => ArmValues::SeriesL(l),
                (None, Some(c), None, None) if positive(c) => ArmValues::ShuntC(c),
                (None, None, Some([l, c]), None) if positive(l) && positive(c) => ArmValues::SeriesTank(l, c),
                (None, None, None, Some([l, c])) if positive(l) && positive(c) => ArmValues::ShuntResonator(l, c),
                _ => {
                    return Err(invalid(
                        "arm",
                        format!("arm {}", i + 1),
                        "expected exactly one of series_l, shunt_c, series_tank = [l, c], shunt_resonator = [l, c], all values greater than 0",
                    ))
                }
            };
            arms.push(arm);
        }
        // Every arm adds one pole; a resonator's second element adds a
        // transmission zero, not a pole, so the order is the arm count.
        // Tables stop where the families do.
        if !(1..=MAX_ORDER).contains(&arms.len()) {
            return Err(invalid(
                "arm",
                format!("{} arms", arms.len()),
                &format!("expected 1 to {MAX_ORDER} arms, the orders the families reach"),
            ));
        }
        if arms.len() != raw.order {
            return Err(invalid(
                "order",
                raw.order.to_string(),
                &format!("expected {}, the number of arms listed", arms.len()),
            ));
        }
        let ripple = raw
            .passband_ripple_db
            .filter(|r| positive(*r))
            .ok_or_else(|| {
                invalid(
                    "passband_ripple_db",
                    format!("{:?}", raw.passband_ripple_db),
                    "expected a ripple in dB greater than 0",
                )
            })?;
        // The levels as a design file's are checked: a ripple of 1e308 dB
        // put the mask at minus infinity.
        crate::transform::check_levels(ripple, raw.stopband_attenuation_db).map_err(|p| {
            let key = match p.field {
                crate::transform::MaskField::Attenuation => "stopband_attenuation_db",
                _ => "passband_ripple_db",
            };
            invalid(key, p.got, &p.expected)
        })?;
        let load = raw.load_ohm.filter(|r| positive(*r)).ok_or_else(|| {
            invalid(
                "load_ohm",
                format!("{:?}", raw.load_ohm),
                "expected a normalized load resistance greater than 0",
            )
        })?;
        Ok(PrototypeTable {
            file: file.to_path_buf(),
            description: raw.description,
            reference: raw.reference,
            family: raw.family,
            order: raw.order,
            passband_ripple_db: ripple,
            stopband_attenuation_db: raw.stopband_attenuation_db,
            load_ohm: load,
            arms,
        })
    }
}

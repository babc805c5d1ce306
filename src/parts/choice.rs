//! The parts a build is bought from: the `[parts]` table of a design file,
//! and how the terminations' impedance level is set (`[terminations]
//! level`), which decides the values of the ladder's own parts.

use super::{Distribution, Series};

/// Which real parts an active build is made of.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PartsChoice {
    /// Series of the fixed resistors.
    pub resistor_series: Series,
    /// Their relative tolerance (0.01 is 1 %).
    pub resistor_tolerance: f64,
    /// Series of the capacitors.
    pub capacitor_series: Series,
    /// Their relative tolerance.
    pub capacitor_tolerance: f64,
    /// Smallest and largest capacitor bought, farad.
    pub capacitor_range_f: (f64, f64),
    /// Whether the design file sets `capacitor_range` (a limit: a build
    /// that needs a capacitor outside it is refused) or the default
    /// stands (a preference: a capacitor outside it is a warning).
    pub capacitor_range_given: bool,
    /// Smallest and largest signal resistor bought, ohm: the converters'
    /// resistors, the damping resistors and (with `[terminations] level =
    /// "free"`) the terminations.
    pub resistor_range_ohm: (f64, f64),
    /// Whether the design file sets `resistor_range` (a limit: a build
    /// that needs a signal resistor outside it is refused) or the default
    /// stands (a preference the converters' levels keep to).
    pub resistor_range_given: bool,
    /// The largest FDNR DC-path resistor, ohm (`parts.dc_path_max_ohm`):
    /// it carries DC and the op-amps' bias current only, so it may lie
    /// above the signal range.
    pub dc_path_max_ohm: f64,
    /// How values scatter within their tolerance in a Monte Carlo run.
    pub distribution: Distribution,
}

/// Default largest FDNR DC-path resistor, ohm: 10 Mohm is the top of the
/// common 1 % resistor series as stocked, and with an op-amp input bias
/// of 100 nA it puts 1 V at the FDNR inputs; the 100 Mohm the DC-path
/// factor alone asks for at a 10 kohm level is neither stocked in
/// tolerance nor above a board's own leakage (common practice).
pub const DEFAULT_DC_PATH_MAX_OHM: f64 = 10e6;

impl Default for PartsChoice {
    /// 1 % resistors from E96, 5 % capacitors from E12, 100 pF to 1 uF,
    /// spread uniformly: a common stock of metal-film resistors and film
    /// capacitors (common practice), judged pessimistically. Resistors
    /// from 100 ohm to 1 Mohm: below, an op-amp output driving the
    /// network sees a heavy load; above, resistor noise and stray
    /// capacitance take over (common practice).
    fn default() -> PartsChoice {
        PartsChoice {
            resistor_series: Series::E96,
            resistor_tolerance: 0.01,
            capacitor_series: Series::E12,
            capacitor_tolerance: 0.05,
            capacitor_range_f: (100e-12, 1e-6),
            capacitor_range_given: false,
            resistor_range_ohm: (100.0, 1e6),
            resistor_range_given: false,
            dc_path_max_ohm: DEFAULT_DC_PATH_MAX_OHM,
            distribution: Distribution::Uniform,
        }
    }
}

/// How the impedance level of the passive ideal is set (`[terminations]
/// level` of a design file). Scaling both terminations by one factor
/// scales every impedance of the ladder with them and leaves its voltage
/// transfer unchanged, so where the terminations are resistors the
/// designer chooses, the level is a freedom.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ImpedanceLevel {
    /// The design file's terminations as written (the default).
    #[default]
    Fixed,
    /// Both terminations scaled by the factor that puts the ladder's own
    /// parts in their ranges and its capacitors nearest to preferred
    /// values.
    Free,
}

impl std::fmt::Display for ImpedanceLevel {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            ImpedanceLevel::Fixed => "fixed",
            ImpedanceLevel::Free => "free",
        })
    }
}

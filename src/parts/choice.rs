//! The parts a build is bought from: the `[parts]` table of a design file.

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
    /// How values scatter within their tolerance in a Monte Carlo run.
    pub distribution: Distribution,
}

impl Default for PartsChoice {
    /// 1 % resistors from E96, 5 % capacitors from E12, 100 pF to 1 uF,
    /// spread uniformly: a common stock of metal-film resistors and film
    /// capacitors (common practice), judged pessimistically.
    fn default() -> PartsChoice {
        PartsChoice {
            resistor_series: Series::E96,
            resistor_tolerance: 0.01,
            capacitor_series: Series::E12,
            capacitor_tolerance: 0.05,
            capacitor_range_f: (100e-12, 1e-6),
            distribution: Distribution::Uniform,
        }
    }
}

//! The minimum order of every family for a mask (the `order` command).

use crate::approx::{self, ApproxError, Family, FAMILIES};
use crate::synth;
use crate::transform::Band;

/// One family's minimum order for a mask.
#[derive(Debug, Clone, PartialEq)]
pub struct OrderRow {
    /// The family.
    pub family: Family,
    /// Its minimum order, or why there is none.
    pub order: Result<usize, ApproxError>,
    /// The highest order its ladder synthesis holds
    /// ([`synth::max_order`]).
    pub synthesis_max_order: usize,
    /// Whether that order has no ladder with positive elements between
    /// equal terminations (the inverse Chebyshev's shallow floors; see
    /// [`super::DesignError::NoLadder`]).
    pub no_ladder: bool,
}

/// The minimum orders of every family for one mask.
#[derive(Debug, Clone, PartialEq)]
pub struct OrderTable {
    /// The normalized lowpass stopband edge the mask maps to, rad/s.
    pub normalized_stopband_rad_s: f64,
    /// One row per family.
    pub rows: Vec<OrderRow>,
}

/// The minimum order of every family for `band` (which must have a
/// stopband edge; without one the normalized edge is infinite and every
/// family needs order 1) with these ripple and attenuation.
pub fn order_table(band: &Band, ripple_db: f64, attenuation_db: f64) -> OrderTable {
    let ws = band.normalized_stopband().unwrap_or(f64::INFINITY);
    OrderTable {
        normalized_stopband_rad_s: ws,
        rows: FAMILIES
            .iter()
            .map(|&family| {
                let order = approx::min_order(family, ws, ripple_db, attenuation_db);
                let synthesis_max_order = synth::max_order(family);
                let no_ladder = match order {
                    Ok(n) if family.finite_zeros() && n <= synthesis_max_order => {
                        has_no_ladder(family, n, ripple_db, attenuation_db)
                    }
                    _ => false,
                };
                OrderRow {
                    family,
                    order,
                    synthesis_max_order,
                    no_ladder,
                }
            })
            .collect(),
    }
}

/// Whether the synthesis finds no order of zero removal with positive
/// elements for this prototype between equal terminations.
fn has_no_ladder(family: Family, order: usize, ripple_db: f64, attenuation_db: f64) -> bool {
    let Ok(proto) = super::prototype_at(family, order, ripple_db, attenuation_db, 1.0) else {
        return false;
    };
    matches!(
        synth::synthesize(&proto, 1.0, synth::Form::MinInductor),
        Err(synth::SynthError::NoZeroOrder { .. })
    )
}

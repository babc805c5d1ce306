//! Errors of the approximation stage, and the checks that raise them.
//!
//! Every variant carries the offending value and says what is accepted.

use super::{Family, Variant, MAX_LEVEL_DB, MIN_RIPPLE_DB};

/// Why an approximation or an order estimate was refused.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ApproxError {
    /// The order is 0 or above the family's largest supported order.
    #[error("order {order} is out of range for a {family} approximation: accepted 1 to {max}")]
    OrderOutOfRange {
        /// The family asked for.
        family: Family,
        /// The order given.
        order: usize,
        /// The largest order the family supports.
        max: usize,
    },
    /// The passband ripple (or Butterworth edge loss) is not a usable level.
    #[error(
        "passband ripple {ripple_db} dB is out of range: accepted {MIN_RIPPLE_DB:e} to {MAX_LEVEL_DB} dB"
    )]
    RippleOutOfRange {
        /// The ripple given, dB.
        ripple_db: f64,
    },
    /// The stopband attenuation does not exceed the ripple, or is too large.
    #[error(
        "stopband attenuation {attenuation_db} dB is out of range: accepted more than the passband ripple ({ripple_db} dB) and at most {MAX_LEVEL_DB} dB"
    )]
    AttenuationOutOfRange {
        /// The attenuation given, dB.
        attenuation_db: f64,
        /// The ripple it must exceed, dB.
        ripple_db: f64,
    },
    /// A modified variant was asked for an odd order.
    #[error("the {variant} needs an even order, got {order}")]
    VariantNeedsEvenOrder {
        /// The variant asked for.
        variant: Variant,
        /// The odd order given.
        order: usize,
    },
    /// A modified variant was asked for a family it does not modify.
    #[error("the {variant} does not apply to a {family} approximation: accepted for {}", accepted.iter().map(ToString::to_string).collect::<Vec<_>>().join(" and "))]
    VariantNotForFamily {
        /// The variant asked for.
        variant: Variant,
        /// The family given.
        family: Family,
        /// The families the variant applies to.
        accepted: &'static [Family],
    },
    /// The stopband edge of a mask is not above the passband edge 1.
    #[error(
        "stopband edge {ws} is out of range: accepted a finite value above the passband edge 1"
    )]
    StopbandEdgeOutOfRange {
        /// The normalized stopband edge given.
        ws: f64,
    },
    /// The iteration that finds a family's poles did not converge (a
    /// program fault: every order and level in range converges).
    #[error("the poles of the {family} approximation of order {order} were not found")]
    RootsNotFound {
        /// The family.
        family: Family,
        /// The order.
        order: usize,
    },
    /// A family without an order formula misses the mask even at its
    /// largest supported order.
    #[error(
        "the mask needs more than order {max} of the {family} approximation (the largest supported): order {max} reaches {reached_db:.2} dB at the stopband edge"
    )]
    MaskBeyondMaxOrder {
        /// The family asked for.
        family: Family,
        /// The largest order the family supports.
        max: usize,
        /// The attenuation at the stopband edge at that order, dB.
        reached_db: f64,
    },
    /// The mask needs more than the family's largest supported order.
    #[error(
        "the mask needs order {} of the {family} approximation, above the largest supported order {max}", needed.ceil()
    )]
    OrderTooHigh {
        /// The family asked for.
        family: Family,
        /// The real-valued order the mask needs.
        needed: f64,
        /// The largest order the family supports.
        max: usize,
    },
}

/// Accepts a ripple in [`MIN_RIPPLE_DB`, `MAX_LEVEL_DB`] (NaN refused).
pub(crate) fn check_ripple(ripple_db: f64) -> Result<(), ApproxError> {
    if (MIN_RIPPLE_DB..=MAX_LEVEL_DB).contains(&ripple_db) {
        Ok(())
    } else {
        Err(ApproxError::RippleOutOfRange { ripple_db })
    }
}

/// Accepts an attenuation above a valid ripple and at most `MAX_LEVEL_DB`.
pub(crate) fn check_attenuation(ripple_db: f64, attenuation_db: f64) -> Result<(), ApproxError> {
    check_ripple(ripple_db)?;
    if attenuation_db > ripple_db && attenuation_db <= MAX_LEVEL_DB {
        Ok(())
    } else {
        Err(ApproxError::AttenuationOutOfRange {
            attenuation_db,
            ripple_db,
        })
    }
}

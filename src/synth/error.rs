//! Why a ladder could not be synthesized.
//!
//! Every variant carries the offending values and says what would have
//! been accepted. Input errors (ratio, variant, malformed roots) come
//! first; then the self-checks of the synthesis, which fail only when the
//! roots are inconsistent with each other or the arithmetic ran out of
//! precision.

use super::{ArmValues, Form};
use crate::approx::Variant;

/// A synthesis failure.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SynthError {
    /// The termination ratio is not a positive finite number.
    #[error("load ratio {load_ratio} is not accepted: R_load / R_source must be a positive finite number")]
    InvalidLoadRatio {
        /// The ratio given.
        load_ratio: f64,
    },
    /// The terminations ask for more DC transmission than the prototype
    /// allows (flat-loss factor K_t > 1).
    #[error(
        "load ratio {load_ratio} is infeasible for the {variant} of order {order}: \
         it needs a ratio <= {lower} or >= {upper}, or the modified form with its lowest reflection zero at DC, which takes any ratio"
    )]
    InfeasibleRatio {
        /// The ratio given.
        load_ratio: f64,
        /// The order.
        order: usize,
        /// The prototype's variant.
        variant: Variant,
        /// Largest feasible ratio below 1.
        lower: f64,
        /// Smallest feasible ratio above 1.
        upper: f64,
    },
    /// An even-order ladder with unequal terminations has a fixed
    /// orientation: series inductor first needs R_load > R_source, shunt
    /// capacitor first needs R_load < R_source.
    #[error(
        "an even-order ({order}) ladder in the {form} form needs a load ratio {needs} 1, got {load_ratio}: \
         use the ratio {inverse} (terminations swapped) or the other form"
    )]
    EvenOrderOrientation {
        /// The order.
        order: usize,
        /// The form asked for.
        form: Form,
        /// The ratio given.
        load_ratio: f64,
        /// Its inverse, which this form accepts.
        inverse: f64,
        /// The side of 1 the ratio must lie on, "above" or "below".
        needs: &'static str,
    },
    /// The standard even-order elliptic or inverse Chebyshev has a finite
    /// gain at infinity, which a ladder of plain L and C cannot realize.
    #[error(
        "the standard {family} of even order {order} is not realizable as a ladder: \
         use the ZeroAtInfinity variant (or, elliptic only, ReflectionAtDc)"
    )]
    NotALadder {
        /// The family.
        family: crate::approx::Family,
        /// The order.
        order: usize,
    },
    /// The root counts do not describe a lowpass ladder.
    #[error(
        "{poles} poles, {reflection_zeros} reflection zeros and {transmission_zeros} transmission zeros \
         do not make a lowpass ladder: it needs n >= 1 poles, n reflection zeros and fewer than n/2 zero pairs"
    )]
    RootCount {
        /// Number of poles (the order).
        poles: usize,
        /// Number of reflection zeros.
        reflection_zeros: usize,
        /// Number of finite transmission zero pairs.
        transmission_zeros: usize,
    },
    /// A pole not strictly inside the left half plane.
    #[error("pole {re} + {im}j is not in the left half plane (a ladder's natural frequencies have Re < 0)")]
    UnstablePole {
        /// Real part.
        re: f64,
        /// Imaginary part.
        im: f64,
    },
    /// A transmission zero that is not a positive finite frequency.
    #[error("transmission zero {w} rad/s is not accepted: it must be positive and finite")]
    InvalidTransmissionZero {
        /// The frequency given.
        w: f64,
    },
    /// A DC gain that is not a positive finite number.
    #[error("DC gain {dc_gain} is not accepted: |H(0)| must be positive and finite")]
    InvalidDcGain {
        /// The gain given.
        dc_gain: f64,
    },
    /// A root set that is not closed under complex conjugation, so its
    /// polynomial is not real.
    #[error("the {which} are not in conjugate pairs: imaginary residue {residue:e} exceeds {tolerance:e}")]
    NotConjugate {
        /// "poles" or "reflection zeros".
        which: &'static str,
        /// Largest relative imaginary coefficient.
        residue: f64,
        /// Accepted residue.
        tolerance: f64,
    },
    /// The reflection zeros do not give the reflection the terminations
    /// and the prototype require, at the frequency `w`.
    #[error("|S11(j{w})| is {got} but the terminations and prototype require {expected}")]
    InconsistentReflection {
        /// Frequency of the check, rad/s.
        w: f64,
        /// Required |S11|.
        expected: f64,
        /// |S11| from the roots given.
        got: f64,
    },
    /// A pole that is not a root of the Feldtkeller polynomial of the
    /// reflection and transmission zeros given.
    #[error(
        "pole {re} + {im}j does not fit the reflection and transmission zeros: \
         polishing it moved it by {moved:e} of its distance from the jw axis (accepted: {tolerance:e})"
    )]
    InconsistentPole {
        /// Real part.
        re: f64,
        /// Imaginary part.
        im: f64,
        /// The move while polishing, over |Re p|.
        moved: f64,
        /// Accepted relative move.
        tolerance: f64,
    },
    /// An element came out zero, negative or not finite.
    #[error("arm {arm} came out with the non-positive value {value}: this order of zero removal does not give a ladder")]
    NegativeElement {
        /// The arm, counted from the source (0-based).
        arm: usize,
        /// The value, henry or farad.
        value: f64,
    },
    /// The extractions from the two ends lost accuracy before they met.
    #[error(
        "order {order}: only {from_source} arms from the source end and {from_load} from the load end \
         stayed accurate (rounding residue <= {limit:e}); they must overlap in at least one arm"
    )]
    NoJunction {
        /// The order (number of arms).
        order: usize,
        /// Arms extracted accurately from the source end.
        from_source: usize,
        /// Arms extracted accurately from the load end.
        from_load: usize,
        /// The residue limit.
        limit: f64,
    },
    /// The ladder extracted from the source end and the one extracted from
    /// the load end disagree on the middle arm: the roots do not describe
    /// one ladder with these terminations (or precision ran out).
    #[error(
        "arm {} is {from_source} from the source end but {from_load} from the load end \
         (relative tolerance {tolerance:e})", arm + 1
    )]
    JunctionMismatch {
        /// The middle arm, counted from the source (0-based).
        arm: usize,
        /// Its values extracted from the source end.
        from_source: ArmValues,
        /// Its values extracted from the load end.
        from_load: ArmValues,
        /// Accepted relative difference.
        tolerance: f64,
    },
    /// No order of the transmission zeros gave a valid ladder.
    #[error("none of the {tried} orders of zero removal tried gave a valid ladder; the usual order failed with: {first}")]
    NoZeroOrder {
        /// How many orders were tried.
        tried: usize,
        /// The failure of the first (usual) order.
        first: Box<SynthError>,
    },
}

//! What the terminations force on the characteristic function.
//!
//! A lossless two-port between a 1 ohm source and a load of `r` ohm passes,
//! at DC, |S21(0)|^2 = 4r/(1+r)^2. The ladder realizes the prototype up to
//! a flat factor: |S21|^2 = K_t |H|^2, so K_t = 4r/((1+r)^2 |H(0)|^2), which
//! must not exceed 1 (a passive ladder cannot gain). The reflection then
//! satisfies |S11|^2 = 1 - K_t |H|^2 = (eps^2 R^2 + level) / (1 + eps^2 R^2)
//! with `level = 1 - K_t`: the reflection zeros are the roots of
//! `eps^2 R^2 + level`, which [`crate::approx::Prototype::reflection_roots`]
//! supplies.
//!
//! Invariant: every quantity here is written so that it keeps its relative
//! accuracy for ratios near 1 (no `1 - K_t` cancellation), and depends on
//! the prototype only through `e0 = eps^2 R(0)^2`, the DC reflection.

use crate::approx::{Family, Params, Variant};

/// Largest flat-loss level, of either sign, taken as zero. The level is
/// computed from `r` and `eps` with a few roundings (about 1e-16 relative
/// to `4 r e0`, which is at most of order 1); a level this small changes
/// |S21|^2 by at most 1e-12, i.e. 4e-12 dB, far inside the 0.001 dB
/// budget, while an infeasible ratio misses by far more than 1e-12.
pub(crate) const LEVEL_TOLERANCE: f64 = 1e-12;

/// `eps^2 R(0)^2`: zero when the prototype has unit DC gain (odd orders,
/// the monotonic passbands, `ReflectionAtDc`), `eps^2` for the even Chebyshev and
/// elliptic forms that keep the ripple loss at DC. This is the
/// normalization documented in [`crate::approx`]: |H(0)|^2 = 1/(1 + e0).
pub(crate) fn dc_reflection(family: Family, order: usize, variant: Variant, eps: f64) -> f64 {
    let keeps_dc_ripple = family.equiripple_passband()
        && order.is_multiple_of(2)
        && variant != Variant::ReflectionAtDc;
    if keeps_dc_ripple {
        eps * eps
    } else {
        0.0
    }
}

/// [`dc_reflection`] of a prototype's parameters.
pub(crate) fn dc_reflection_of(params: &Params, eps: f64) -> f64 {
    dc_reflection(params.family, params.order, params.variant, eps)
}

/// The flat-loss level `1 - K_t` for load ratio `r`, unclamped:
/// `((1 - r)^2 - 4 r e0) / (1 + r)^2`, the same quantity as
/// `1 - 4r(1 + e0)/(1 + r)^2` without its cancellation near `r = 1`.
pub(crate) fn flat_loss_level(load_ratio: f64, e0: f64) -> f64 {
    let r = load_ratio;
    ((1.0 - r).powi(2) - 4.0 * r * e0) / (1.0 + r).powi(2)
}

/// The two ratios at which the level is exactly zero,
/// `(sqrt(1 + e0) -+ sqrt(e0))^2`, lower first: the terminations are
/// feasible at or below the lower one and at or above the upper one.
pub(crate) fn boundary_ratios(e0: f64) -> (f64, f64) {
    let upper = ((1.0 + e0).sqrt() + e0.sqrt()).powi(2);
    (1.0 / upper, upper)
}

/// The DC magnitude |H(0)| = 1/sqrt(1 + e0) of the prototype.
pub(crate) fn dc_gain(e0: f64) -> f64 {
    1.0 / (1.0 + e0).sqrt()
}

/// Whether the terminations can realize a prototype whose DC reflection
/// is `e0`, with the level rounding tolerance.
fn feasible(load_ratio: f64, e0: f64) -> bool {
    flat_loss_level(load_ratio, e0) >= -LEVEL_TOLERANCE
}

/// The variant of an approximation that a ladder with load ratio
/// `load_ratio = R_load / R_source` can realize.
///
/// What the terminations force: |S21(0)|^2 = 4r/(1+r)^2 for
/// `r = load_ratio` must equal `K_t |H(0)|^2` with `K_t <= 1`. So:
/// `Standard` for odd orders and for the monotonic all-pole families
/// (|H(0)| = 1 there); `ZeroAtInfinity` for the even inverse Chebyshev
/// (|H(0)| = 1, but a finite gain at infinity);
/// even Chebyshev: `Standard` when feasible (`r` outside the band around 1
/// where `K_t > 1`), else `ReflectionAtDc`; even elliptic:
/// `ZeroAtInfinity` when feasible, else `ReflectionAtDc` (the standard
/// even elliptic keeps a finite gain at infinity and is not a ladder).
///
/// A ratio that is not a positive finite number gives `ReflectionAtDc`
/// for even orders; [`crate::synth::synthesize`] then rejects the ratio
/// itself.
pub fn variant_for(family: Family, order: usize, eps: f64, load_ratio: f64) -> Variant {
    if order % 2 == 1 {
        return Variant::Standard;
    }
    if !family.equiripple_passband() {
        // Unit DC gain: only the finite zeros ask for a modified form.
        return if family.finite_zeros() {
            Variant::ZeroAtInfinity
        } else {
            Variant::Standard
        };
    }
    let keeps_dc = match family {
        Family::Elliptic => Variant::ZeroAtInfinity,
        _ => Variant::Standard,
    };
    if feasible(load_ratio, dc_reflection(family, order, keeps_dc, eps)) {
        keeps_dc
    } else {
        Variant::ReflectionAtDc
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The level formula equals 1 - K_t computed the plain way where that
    /// is accurate (r far from 1), and the boundary ratios zero it.
    #[test]
    fn level_matches_its_definition() {
        // 1 dB ripple: eps^2 = 10^(1/10) - 1
        let eps2 = (0.1 * std::f64::consts::LN_10).exp_m1();
        for r in [0.2, 0.5, 3.0, 7.0] {
            let k_t = 4.0 * r * (1.0 + eps2) / (1.0 + r).powi(2);
            let plain = 1.0 - k_t;
            assert!((flat_loss_level(r, eps2) - plain).abs() < 1e-15, "r = {r}");
        }
        let (lo, hi) = boundary_ratios(eps2);
        assert!(flat_loss_level(lo, eps2).abs() < 1e-15);
        assert!(flat_loss_level(hi, eps2).abs() < 1e-15);
        assert!((lo * hi - 1.0).abs() < 1e-15);
    }
}

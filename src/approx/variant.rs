//! The modified even-order forms, as an exact frequency transformation of
//! x = w^2 applied to the standard characteristic function.
//!
//! These are the transformations Saal (1963) used for the types B and C of
//! his catalogue (from memory). In x the map is the Moebius transformation
//! that fixes x = 1, sends the old Z to 0 and the old P to infinity:
//!
//!   x_new = (x_old - Z)/(1 - Z) * (P - 1)/(P - x_old),
//!
//! the inverse of the forward forms
//! - [`Variant::ZeroAtInfinity`] (Z = 0, P = highest transmission zero^2):
//!   x_old = P x / ((P - 1) + x);
//! - [`Variant::ReflectionAtDc`] (Z = lowest reflection zero^2): for the
//!   elliptic x_old = (Z + a x)/(1 + b x), b = (1 - Z)/(P - 1), a = P b;
//!   for Chebyshev P is infinite and x_old = Z + (1 - Z) x.
//!
//! Invariants: R_new(w) = R_old(w_old) pointwise, so the passband edge
//! (x = 1), every ripple level and the stopband attenuation are kept; the
//! map is increasing from x_old in (Z, P) onto x_new in (0, infinity), so
//! ascending frequencies stay ascending.

use super::roots::left_sqrt;
use super::scalar::Scalar;
use super::Variant;
use num_complex::Complex64;

/// A frequency transformation of w^2 fixing w = 1.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct FrequencyMap {
    /// Z, the old w^2 sent to DC (0 keeps DC).
    to_dc: f64,
    /// P, the old w^2 sent to infinity (`None` keeps infinity).
    to_infinity: Option<f64>,
}

impl FrequencyMap {
    /// The map of `variant` for a standard function with these jw-axis
    /// reflection zeros (s-plane points) and ascending transmission zeros
    /// (w > 0).
    pub(crate) fn new(
        variant: Variant,
        reflection_zeros: &[Complex64],
        transmission_zeros: &[f64],
    ) -> FrequencyMap {
        let highest_zero = transmission_zeros.last().map(|w| w * w);
        let lowest_reflection = reflection_zeros
            .iter()
            .map(|z| z.im)
            .filter(|&w| w > 0.0)
            .fold(f64::INFINITY, f64::min);
        let lowest_reflection = if lowest_reflection.is_finite() {
            lowest_reflection * lowest_reflection
        } else {
            0.0
        };
        match variant {
            Variant::Standard => FrequencyMap {
                to_dc: 0.0,
                to_infinity: None,
            },
            Variant::ZeroAtInfinity => FrequencyMap {
                to_dc: 0.0,
                to_infinity: highest_zero,
            },
            Variant::ReflectionAtDc => FrequencyMap {
                to_dc: lowest_reflection,
                to_infinity: highest_zero,
            },
        }
    }

    /// x_new from x_old (real frequency squared or complex -s^2).
    fn apply<T: Scalar>(&self, x: T) -> T {
        let moved = (x - self.to_dc) / (1.0 - self.to_dc);
        match self.to_infinity {
            None => moved,
            Some(p) => moved * (1.0 - p) / (x - p),
        }
    }

    /// The new frequency of an old jw-axis frequency, sign kept.
    pub(crate) fn frequency(&self, w: f64) -> f64 {
        self.apply(w * w).sqrt().copysign(w)
    }

    /// The new left-half-plane root of an old one (x = -s^2).
    pub(crate) fn root(&self, s: Complex64) -> Complex64 {
        left_sqrt(-self.apply(-(s * s)))
    }

    /// The new finite transmission zeros: the one sent to infinity (the
    /// highest, which defines P) is dropped, the others mapped.
    pub(crate) fn transmission_zeros(&self, zeros: &[f64]) -> Vec<f64> {
        let kept = match (self.to_infinity, zeros.split_last()) {
            (Some(_), Some((_, rest))) => rest,
            _ => zeros,
        };
        kept.iter().map(|&w| self.frequency(w)).collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The Moebius form really inverts the forward maps of Saal's types B
    /// and C as the module documentation writes them.
    #[test]
    fn inverts_the_forward_maps() {
        let (z, p) = (0.04, 9.0);
        let b = (1.0 - z) / (p - 1.0);
        let forward_c = |x: f64| (z + p * b * x) / (1.0 + b * x);
        let forward_b = |x: f64| p * x / ((p - 1.0) + x);
        let type_c = FrequencyMap {
            to_dc: z,
            to_infinity: Some(p),
        };
        let type_b = FrequencyMap {
            to_dc: 0.0,
            to_infinity: Some(p),
        };
        for x in [0.0, 0.3, 1.0, 2.5, 40.0] {
            assert!((type_c.apply(forward_c(x)) - x).abs() <= 1e-14 * (1.0 + x));
            assert!((type_b.apply(forward_b(x)) - x).abs() <= 1e-14 * (1.0 + x));
        }
    }
}

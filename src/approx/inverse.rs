//! Inverse Chebyshev (Chebyshev type II): monotonic passband, equiripple
//! stopband.
//!
//! With the passband edge at w = 1 (loss Ap) and the stopband floor As,
//! R(w) = T_n(ws) / T_n(ws / w), where T_n(ws) = eps_s / eps fixes the
//! stopband edge ws = cosh(acosh(eps_s / eps) / n) (Daniels 1974, ch. 4,
//! from memory): the loss is exactly As at ws and at every stopband
//! maximum of |H|, and exactly Ap at w = 1. scipy.signal's `cheb2ap` is the
//! same function with the stopband edge at 1 rad/s.
//!
//! - Roots of 1 + e^2 R^2 = 0: with u = ws / w these are Chebyshev type I
//!   roots of ripple factor (eps / eps_s) / e in s' = ws / s, so
//!   s = ws / s' (the reciprocal keeps the left half plane and the
//!   conjugate pairs).
//! - Reflection zeros: R vanishes only at DC, n times (a maximally flat
//!   passband, as Butterworth's).
//! - Transmission zeros: ws / cos((2i - 1) pi / 2n), where T_n(ws/w) = 0.
//!
//! Even orders keep a finite loss As at infinity; the ladder needs the
//! highest zero moved to infinity ([`super::Variant::ZeroAtInfinity`], the
//! same map as for the elliptic).

use super::characteristic::Standard;
use super::decibel::ripple_factor;
use super::equiripple::Equiripple;
use super::order::acosh;
use num_complex::Complex64;
use std::f64::consts::PI;

/// An inverse Chebyshev characteristic function.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct InverseChebyshev {
    order: usize,
    /// The stopband edge, normalized.
    ws: f64,
    /// eps / eps_s = 1 / T_n(ws).
    ratio: f64,
    /// The Chebyshev type I function of the same order.
    chebyshev: Equiripple,
}

impl InverseChebyshev {
    /// Order `order`, loss `ripple_db` at w = 1, floor `attenuation_db`.
    pub(crate) fn new(order: usize, ripple_db: f64, attenuation_db: f64) -> InverseChebyshev {
        let eps = ripple_factor(ripple_db);
        let ratio = eps / ripple_factor(attenuation_db);
        InverseChebyshev {
            order,
            ws: (acosh(1.0 / ratio) / order as f64).cosh(),
            ratio,
            chebyshev: Equiripple::chebyshev(order),
        }
    }
}

impl Standard for InverseChebyshev {
    fn roots(&self, eps: f64) -> Vec<Complex64> {
        self.chebyshev
            .roots(self.ratio / eps)
            .into_iter()
            .map(|s| self.ws / s)
            .collect()
    }

    fn reflection_zeros(&self) -> Vec<Complex64> {
        vec![Complex64::ZERO; self.order]
    }

    fn transmission_zeros(&self) -> Vec<f64> {
        let n = self.order as f64;
        (1..=self.order / 2)
            .map(|i| self.ws / ((2 * i - 1) as f64 * PI / (2.0 * n)).cos())
            .collect()
    }

    fn stopband_edge(&self) -> Option<f64> {
        Some(self.ws)
    }
}

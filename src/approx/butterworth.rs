//! Butterworth: R(w) = w^n, the maximally flat magnitude.
//!
//! Invariant: the loss at w = 1 is the stated edge attenuation, so the
//! poles lie on the circle of radius eps^(-1/n) (eps^2 w^2n = 1 there);
//! scipy's `buttap` is the same circle at eps = 1 (3.0103 dB).

use super::characteristic::{ripple_grid, with_conjugates, Standard};
use num_complex::Complex64;
use std::f64::consts::FRAC_PI_2;

/// The Butterworth characteristic function of one order.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Butterworth {
    /// The order n.
    pub(crate) order: usize,
}

impl Standard for Butterworth {
    /// The roots of 1 + eps^2 (-s^2)^n = 0 in the left half plane:
    /// eps^(-1/n) (-cos(x pi/2) +- j sin(x pi/2)) on the ripple grid.
    fn roots(&self, eps: f64) -> Vec<Complex64> {
        let radius = eps.powf(-1.0 / self.order as f64);
        with_conjugates(ripple_grid(self.order).map(|x| {
            let (sin, cos) = (x * FRAC_PI_2).sin_cos();
            Complex64::new(-radius * cos, radius * sin)
        }))
    }

    /// F(s) = s^n: every reflection zero sits at DC.
    fn reflection_zeros(&self) -> Vec<Complex64> {
        vec![Complex64::ZERO; self.order]
    }

    fn transmission_zeros(&self) -> Vec<f64> {
        Vec::new()
    }

    fn stopband_edge(&self) -> Option<f64> {
        None
    }
}

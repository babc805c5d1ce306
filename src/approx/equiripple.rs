//! Equiripple passbands: Chebyshev type I and elliptic (Cauer).
//!
//! Both are written in Jacobi's parametrization (R. W. Daniels,
//! Approximation Methods for Electronic Filter Design, 1974, ch. 5; H. J.
//! Orchard and A. N. Willson, "Elliptic functions for filter design", IEEE
//! Trans. Circuits and Systems I 44, 1997; both from memory):
//! w = cd(u K, k) gives R(w) = cd(n u K1, k1) with the selectivity k, the
//! discrimination k1 and the degree equation n K'/K = K1'/K1 linking them.
//! R vanishes where n u is odd; with x = 1 - u on the ripple grid
//! x = j/n (n - j odd), and cd(u K) = sn(x K), this yields
//! - reflection zeros w = sn(x K, k),
//! - transmission zeros 1/(k sn(x K, k)) for x > 0,
//! - roots of 1 + eps^2 R^2 = 0: s = j sn((x + j v0) K, k) and conjugates,
//!   with sn(j n v0 K1, k1) = j/eps.
//!
//! Chebyshev is the limit k = k1 = 0, where the Landen sequences are empty
//! and sn is the sine: the same code gives cos((2i-1) pi/2n) for the
//! reflection zeros and -sinh(mu) cos(theta) + j cosh(mu) sin(theta),
//! mu = asinh(1/eps)/n, for the poles (scipy's `cheb1ap` formula).

use super::characteristic::{on_axis, ripple_grid, with_conjugates, Standard};
use super::decibel::{power_ratio_m1, ripple_factor};
use super::jacobi::{solve_degree, Landen, Modulus};
use num_complex::Complex64;
use std::f64::consts::FRAC_1_SQRT_2;

/// A Chebyshev or elliptic characteristic function.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Equiripple {
    order: usize,
    /// The selectivity k = 1 / (stopband edge); 0 for Chebyshev.
    k: f64,
    /// Landen sequence of k.
    selectivity: Landen,
    /// Landen sequence of the discrimination k1.
    discrimination: Landen,
}

impl Equiripple {
    /// Chebyshev type I of order `order`.
    pub(crate) fn chebyshev(order: usize) -> Equiripple {
        Equiripple {
            order,
            k: 0.0,
            selectivity: Landen::new(Modulus::ZERO),
            discrimination: Landen::new(Modulus::ZERO),
        }
    }

    /// The elliptic function of order `order` whose loss is exactly
    /// `ripple_db` at the passband ripple maxima and `attenuation_db` at the
    /// stopband minima: k1 is fixed by the levels, k by the degree equation
    /// (scipy's `ellipap` convention).
    pub(crate) fn elliptic(order: usize, ripple_db: f64, attenuation_db: f64) -> Equiripple {
        let k1 = discrimination(ripple_db, attenuation_db);
        let k = solve_degree(order, k1);
        Equiripple {
            order,
            k: k.k,
            selectivity: Landen::new(k),
            discrimination: Landen::new(k1),
        }
    }
}

impl Equiripple {
    /// The zeros of R, w >= 0 ascending: w = sn(x K, k) on the ripple grid.
    fn zero_frequencies(&self) -> impl Iterator<Item = f64> + '_ {
        ripple_grid(self.order).map(|x| self.selectivity.sn(x))
    }
}

/// The discrimination k1 = eps / eps_s. When As is within about 3 dB of
/// Ap, k1' is the smaller member and comes directly from
/// sqrt(10^(Ap/10) (10^((As-Ap)/10) - 1)) / eps_s; otherwise from k1 (the
/// gap form would carry the rounding of exp at As ln10/10, ~1e-15, into
/// k1', which the degree equation raises to the n-th power).
pub(crate) fn discrimination(ripple_db: f64, attenuation_db: f64) -> Modulus {
    let stop = ripple_factor(attenuation_db);
    let k1 = ripple_factor(ripple_db) / stop;
    if k1 <= FRAC_1_SQRT_2 {
        return Modulus::from_small(k1);
    }
    let gap = power_ratio_m1(attenuation_db - ripple_db) * (power_ratio_m1(ripple_db) + 1.0);
    Modulus::from_small(gap.sqrt() / stop).complement()
}

impl Standard for Equiripple {
    fn roots(&self, eps: f64) -> Vec<Complex64> {
        let v0 = self.discrimination.asn_imaginary(1.0 / eps) / self.order as f64;
        with_conjugates(ripple_grid(self.order).map(|x| {
            let w = self.selectivity.sn(Complex64::new(x, v0));
            // s = j w, written out so the real pole at x = 0 stays exactly real.
            Complex64::new(-w.im, w.re)
        }))
    }

    fn reflection_zeros(&self) -> Vec<Complex64> {
        on_axis(self.zero_frequencies())
    }

    /// Empty for Chebyshev (k = 0 puts them at infinity).
    fn transmission_zeros(&self) -> Vec<f64> {
        if self.k == 0.0 {
            return Vec::new();
        }
        let mut zeros: Vec<f64> = self
            .zero_frequencies()
            .filter(|&w| w > 0.0)
            .map(|w| 1.0 / (self.k * w))
            .collect();
        zeros.reverse();
        zeros
    }

    fn stopband_edge(&self) -> Option<f64> {
        (self.k > 0.0).then(|| 1.0 / self.k)
    }
}

//! Legendre (optimum monotonic, "optimum L") responses:
//! |H(jw)|^2 = 1/(1 + eps^2 L_n(w^2)), with L_n the polynomial of degree n
//! that rises monotonically from L_n(0) = 0 to L_n(1) = 1 with the largest
//! slope at w = 1 (A. Papoulis, "Optimum filters with monotonic response",
//! Proc. IRE 46, 1958; from memory).
//!
//! In x = 2 w^2 - 1, L_n(x) = C integral from -1 to x of w(y) v(y)^2 dy:
//! - odd n = 2k + 1: w = 1, v = sum_(i<=k) (2i + 1) P_i(y), the kernel
//!   polynomial of the Legendre weight at y = 1;
//! - even n = 2k + 2: w = 1 + y, v = P'_(k+1)(y) = sum of (2i + 1) P_i(y)
//!   over i <= k with i = k mod 2, the kernel polynomial of the weight
//!   1 + y at y = 1;
//!
//! with C fixing L_n(1) = 1. Both give the published L_3 = 3w^6 - 3w^4 +
//! w^2 and L_4 = 6w^8 - 8w^6 + 3w^4 (tests/families.rs).
//!
//! The polynomial is kept as a Chebyshev series in x (coefficients of
//! order 1, exact products and integrals), not as powers of w^2, whose
//! coefficients alternate in sign and reach 1e13 at n = 25.

use super::roots::{aberth, conjugate_closed, left_sqrt};
use num_complex::Complex64;
use std::f64::consts::PI;

/// L_n as a Chebyshev series in x = 2 w^2 - 1, with its derivative.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct LossPolynomial {
    /// Coefficients of L_n(x) on T_0 .. T_n.
    value: Vec<f64>,
    /// Coefficients of dL_n/dx on T_0 .. T_(n-1).
    slope: Vec<f64>,
}

impl LossPolynomial {
    /// The optimum monotonic loss polynomial of order `order` (>= 1).
    pub(crate) fn new(order: usize) -> LossPolynomial {
        let even = order.is_multiple_of(2);
        // The degree of v: n = 2k + 1 (odd) or 2k + 2 (even).
        let k = (order - 1) / 2;
        let kernel = |y: f64| {
            legendre_values(k, y)
                .iter()
                .enumerate()
                .filter(|(i, _)| !even || (k - i).is_multiple_of(2))
                .map(|(i, p)| (2 * i + 1) as f64 * p)
                .sum::<f64>()
        };
        let v = interpolate(k, kernel);
        let mut integrand = product(&v, &v);
        if even {
            integrand = times_one_plus_x(&integrand);
        }
        let mut value = integral(&integrand);
        // Zero at x = -1 (w = 0), one at x = 1 (the passband edge).
        value[0] -= alternating_sum(&value);
        let at_edge: f64 = value.iter().sum();
        let value: Vec<f64> = value.iter().map(|c| c / at_edge).collect();
        let slope = integrand.iter().map(|c| c / at_edge).collect();
        LossPolynomial { value, slope }
    }

    /// L_n and dL_n/dx at a complex x.
    pub(crate) fn value_slope(&self, x: Complex64) -> (Complex64, Complex64) {
        (clenshaw(&self.value, x), clenshaw(&self.slope, x))
    }
}

/// P_0(y) .. P_k(y) by Bonnet's recurrence.
fn legendre_values(k: usize, y: f64) -> Vec<f64> {
    let mut p = vec![1.0, y];
    for i in 1..k {
        let next = ((2 * i + 1) as f64 * y * p[i] - i as f64 * p[i - 1]) / (i + 1) as f64;
        p.push(next);
    }
    p.truncate(k + 1);
    p
}

/// The Chebyshev coefficients of the polynomial of degree `degree` that
/// `f` is, from its values at the degree + 1 Chebyshev nodes (exact for a
/// polynomial of that degree, up to rounding).
fn interpolate(degree: usize, f: impl Fn(f64) -> f64) -> Vec<f64> {
    let m = degree + 1;
    let angle = |i: usize, j: usize| PI * i as f64 * (j as f64 + 0.5) / m as f64;
    let values: Vec<f64> = (0..m).map(|j| f(angle(1, j).cos())).collect();
    (0..m)
        .map(|i| {
            let c: f64 = values
                .iter()
                .enumerate()
                .map(|(j, v)| v * angle(i, j).cos())
                .sum::<f64>()
                * 2.0
                / m as f64;
            if i == 0 {
                c / 2.0
            } else {
                c
            }
        })
        .collect()
}

/// The product of two Chebyshev series: T_i T_j = (T_(i+j) + T_|i-j|)/2.
fn product(a: &[f64], b: &[f64]) -> Vec<f64> {
    let mut c = vec![0.0; a.len() + b.len() - 1];
    for (i, x) in a.iter().enumerate() {
        for (j, y) in b.iter().enumerate() {
            c[i + j] += x * y / 2.0;
            c[i.abs_diff(j)] += x * y / 2.0;
        }
    }
    c
}

/// (1 + x) times a Chebyshev series: x T_0 = T_1, x T_i = (T_(i+1) +
/// T_(i-1))/2.
fn times_one_plus_x(a: &[f64]) -> Vec<f64> {
    let mut c = a.to_vec();
    c.push(0.0);
    for (i, x) in a.iter().enumerate() {
        if i == 0 {
            c[1] += x;
        } else {
            c[i + 1] += x / 2.0;
            c[i - 1] += x / 2.0;
        }
    }
    c
}

/// An antiderivative (constant term left 0 before the caller's fix):
/// integral T_0 = T_1, integral T_1 = T_2/4, integral T_i =
/// T_(i+1)/(2(i+1)) - T_(i-1)/(2(i-1)).
fn integral(a: &[f64]) -> Vec<f64> {
    let mut c = vec![0.0; a.len() + 1];
    for (i, x) in a.iter().enumerate() {
        match i {
            0 => c[1] += x,
            1 => c[2] += x / 4.0,
            _ => {
                c[i + 1] += x / (2 * (i + 1)) as f64;
                c[i - 1] -= x / (2 * (i - 1)) as f64;
            }
        }
    }
    c
}

/// The series at x = -1: sum of (-1)^i c_i.
fn alternating_sum(c: &[f64]) -> f64 {
    c.iter()
        .enumerate()
        .map(|(i, x)| if i % 2 == 0 { *x } else { -x })
        .sum()
}

/// A Chebyshev series at a complex point (Clenshaw's recurrence).
fn clenshaw(c: &[f64], x: Complex64) -> Complex64 {
    let (mut b1, mut b2) = (Complex64::ZERO, Complex64::ZERO);
    for &ck in c.iter().skip(1).rev() {
        (b1, b2) = (x * 2.0 * b1 - b2 + ck, b1);
    }
    x * b1 - b2 + c[0]
}

/// The left-half-plane poles of 1/(1 + eps^2 L_n(-s^2)): with t = s^2 and
/// x = -2t - 1, the roots of 1 + eps^2 L_n(x), started from the squares of
/// the Butterworth poles of the same eps.
pub(crate) fn poles(loss: &LossPolynomial, order: usize, eps: f64) -> Vec<Complex64> {
    let n = order as f64;
    let radius = eps.powf(-1.0 / n);
    let starts = (1..=order)
        .map(|k| {
            let s = Complex64::from_polar(radius, PI / 2.0 + (2 * k - 1) as f64 * PI / (2.0 * n));
            s * s
        })
        .collect();
    let value_slope = |t: Complex64| {
        let (l, dl) = loss.value_slope(-2.0 * t - 1.0);
        (1.0 + l * eps * eps, dl * (-2.0 * eps * eps))
    };
    conjugate_closed(&aberth(starts, value_slope))
        .into_iter()
        .map(left_sqrt)
        .collect()
}

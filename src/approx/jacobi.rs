//! Jacobi elliptic functions and complete integrals by the descending
//! Landen transformation, and the solution of the degree equation.
//!
//! Invariants:
//! - A modulus always travels with its complement ([`Modulus`]). The smaller
//!   of the two is computed directly and the larger from it as
//!   sqrt((1 - x)(1 + x)), which is then exact to an ulp; the other way
//!   round loses about `1e-16 / x^2` relative accuracy in the small one
//!   (cancellation in 1 - x^2; common practice).
//! - Arguments are normalized to the quarter period: `sn(u)` here means
//!   sn(u K(k), k). The descending Landen transformation keeps the
//!   normalized argument unchanged at every step (K(k) = (1 + k_1) K(k_1),
//!   DLMF 19.8.12, with the argument scaled by the same 1/(1 + k_1),
//!   DLMF 22.7.2), so at the bottom of the descent sn(u) = sin(u pi/2).
//!   This is the Landen evaluation used for filter design by H. J. Orchard
//!   and A. N. Willson, "Elliptic functions for filter design", IEEE Trans.
//!   Circuits and Systems I 44 (1997) (from memory): it stays accurate in
//!   double precision for complex arguments and for moduli very close to 1.

use super::scalar::Scalar;
use std::f64::consts::{FRAC_1_SQRT_2, FRAC_2_PI, FRAC_PI_2, PI};

/// Below this modulus the descent stops: sn(u K, k) = sin(u pi/2) and
/// K(k) = pi/2 hold to within half an ulp, since the first neglected terms
/// are k^2/4 relative (series of K and of sn in powers of k^2), and
/// (1e-8)^2 / 4 = 2.5e-17 < 2^-53.
const NEGLIGIBLE_MODULUS: f64 = 1e-8;

/// Upper bound on descent steps. Each step takes k' to 2 sqrt(k')/(1 + k'),
/// so even k' = 1e-308 (the smallest normal double) is done in 13 steps
/// (unit test below). The cap only ends the loop for k' = 0 exactly, which
/// validated parameters never produce.
const MAX_LANDEN_STEPS: usize = 24;

/// Terms of the theta series used by [`modulus_from_nome`]: with the nome
/// at most e^-pi = 0.0432 the first omitted term is q^20 < 1e-27 relative.
const THETA_TERMS: i32 = 5;

/// A modulus `k` in [0, 1) together with its complement `kc` = sqrt(1 - k^2).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Modulus {
    /// The modulus k.
    pub(crate) k: f64,
    /// The complementary modulus k'.
    pub(crate) kc: f64,
}

impl Modulus {
    /// The modulus 0 (circular functions): Chebyshev's limit.
    pub(crate) const ZERO: Modulus = Modulus { k: 0.0, kc: 1.0 };

    /// The pair of a modulus `k` <= 1/sqrt(2), the smaller member.
    pub(crate) fn from_small(k: f64) -> Modulus {
        Modulus {
            k,
            kc: ((1.0 - k) * (1.0 + k)).sqrt(),
        }
    }

    /// k' as the modulus and k as its complement.
    pub(crate) fn complement(self) -> Modulus {
        Modulus {
            k: self.kc,
            kc: self.k,
        }
    }
}

/// The descending Landen sequence k_1, k_2, ... of a modulus k_0.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Landen {
    /// k_0, the modulus itself.
    k: f64,
    /// k_1 .. k_M, the last one below [`NEGLIGIBLE_MODULUS`].
    descent: Vec<f64>,
}

impl Landen {
    /// Descends from `m` with k_{n+1} = (k_n / (1 + k_n'))^2 and
    /// k_{n+1}' = 2 sqrt(k_n') / (1 + k_n') (DLMF 22.7.1 written for the
    /// pair): both forms keep full relative accuracy, unlike
    /// (1 - k')/(1 + k') when k' is close to 1.
    pub(crate) fn new(m: Modulus) -> Landen {
        let mut descent = Vec::new();
        let mut step = m;
        while step.k > NEGLIGIBLE_MODULUS && descent.len() < MAX_LANDEN_STEPS {
            step = Modulus {
                k: (step.k / (1.0 + step.kc)).powi(2),
                kc: 2.0 * step.kc.sqrt() / (1.0 + step.kc),
            };
            descent.push(step.k);
        }
        Landen { k: m.k, descent }
    }

    /// The complete elliptic integral K(k) = (pi/2) prod (1 + k_n)
    /// (DLMF 19.8.12 applied down the sequence).
    pub(crate) fn quarter_period(&self) -> f64 {
        FRAC_PI_2 * self.descent.iter().map(|k| 1.0 + k).product::<f64>()
    }

    /// sn(u K, k) for a normalized argument `u`, real or complex, by the
    /// ascending recursion w_{n-1} = (1 + k_n) w_n / (1 + k_n w_n^2) from
    /// w_M = sin(u pi/2) (DLMF 22.7.2).
    pub(crate) fn sn<T: Scalar>(&self, u: T) -> T {
        let bottom = (u * FRAC_PI_2).sine();
        self.descent
            .iter()
            .rev()
            .fold(bottom, |w, &k| w * (1.0 + k) / (w * w * k + 1.0))
    }

    /// The v >= 0 with sn(j v K, k) = j y, for y >= 0: the inverse of
    /// [`Landen::sn`] on the imaginary axis. Each step inverts one ascending
    /// step, y_n = 2 y_{n-1} / ((1 + k_n)(1 + sqrt(1 + k_{n-1}^2 y_{n-1}^2))),
    /// and at the bottom sin(j v pi/2) = j sinh(v pi/2).
    pub(crate) fn asn_imaginary(&self, y: f64) -> f64 {
        let mut above = self.k;
        let mut y = y;
        for &k in &self.descent {
            y = 2.0 * y / ((1.0 + k) * (1.0 + 1.0f64.hypot(above * y)));
            above = k;
        }
        FRAC_2_PI * y.asinh()
    }
}

/// The selectivity k of an elliptic function of degree `order` whose
/// discrimination is `k1`: the solution of the degree equation
/// order K'(k)/K(k) = K'(k1)/K(k1).
///
/// k' comes from Jacobi's exact product k' = k1'^N prod_{i=1}^{floor(N/2)}
/// sn^4(u_i K(k1'), k1'), u_i = (2i - 1)/N (Jacobi's exact solution of
/// the degree equation, the modular transformation of order N; see e.g.
/// R. W. Daniels, Approximation Methods for Electronic Filter Design,
/// 1974, ch. 5, from memory; confirmed against mpmath's nome
/// functions by the fixture tests). Whichever of k, k' is the smaller is
/// computed directly: k = sqrt((1 - k')(1 + k')) only when k' <= 1/sqrt(2),
/// otherwise k from the nome q = exp(-pi K(k1') / (N K(k1))), which is then
/// at most e^-pi.
pub(crate) fn solve_degree(order: usize, k1: Modulus) -> Modulus {
    let n = order as f64;
    let upper = Landen::new(k1.complement());
    let product: f64 = (1..=order / 2)
        .map(|i| upper.sn((2 * i - 1) as f64 / n).powi(4))
        .product();
    let kc = k1.kc.powi(order as i32) * product;
    if kc <= FRAC_1_SQRT_2 {
        return Modulus::from_small(kc).complement();
    }
    let lower = Landen::new(k1);
    let q = (-PI * upper.quarter_period() / (n * lower.quarter_period())).exp();
    Modulus {
        k: modulus_from_nome(q),
        kc,
    }
}

/// The modulus of nome `q` <= e^-pi: k = theta_2(q)^2 / theta_3(q)^2
/// (DLMF 22.2.2) with theta_2 = 2 q^(1/4) sum q^(m(m+1)) and
/// theta_3 = 1 + 2 sum q^(m^2) (DLMF 20.2.2, 20.2.3 at z = 0).
fn modulus_from_nome(q: f64) -> f64 {
    let theta2: f64 = (0..THETA_TERMS).map(|m| q.powi(m * (m + 1))).sum();
    let theta3: f64 = 1.0 + 2.0 * (1..THETA_TERMS).map(|m| q.powi(m * m)).sum::<f64>();
    4.0 * q.sqrt() * (theta2 / theta3).powi(2)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The step bound claimed for MAX_LANDEN_STEPS.
    #[test]
    fn descent_from_the_smallest_normal_complement_takes_13_steps() {
        let m = Modulus {
            k: 1.0,
            kc: f64::MIN_POSITIVE,
        };
        assert_eq!(Landen::new(m).descent.len(), 13);
    }

    /// K(1/sqrt 2) = 1.8540746773013719 (mpmath.ellipk(0.5), equal there
    /// to the closed form Gamma(1/4)^2 / (4 sqrt(pi))) and sn(K/2) =
    /// 1/sqrt(1 + k') (the half-period value, from memory; mpmath agrees to
    /// 30 digits). Two ulp: one rounding in the value, one in the check.
    #[test]
    fn lemniscatic_values() {
        let m = Modulus {
            k: FRAC_1_SQRT_2,
            kc: FRAC_1_SQRT_2,
        };
        let landen = Landen::new(m);
        assert!((landen.quarter_period() - 1.854_074_677_301_372).abs() < 4e-16);
        let half = 1.0 / (1.0 + FRAC_1_SQRT_2).sqrt();
        assert!((landen.sn(0.5) - half).abs() < 4e-16);
    }

    /// asn_imaginary inverts sn on the imaginary axis.
    #[test]
    fn imaginary_inverse_round_trips() {
        let landen = Landen::new(Modulus {
            k: 0.99,
            kc: (1.0f64 - 0.99 * 0.99).sqrt(),
        });
        let v = landen.asn_imaginary(3.0);
        let w = landen.sn(num_complex::Complex64::new(0.0, v));
        assert!(w.re.abs() < 1e-15 && (w.im - 3.0).abs() < 1e-14);
    }
}

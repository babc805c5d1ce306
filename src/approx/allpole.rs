//! The all-pole families without closed-form roots (Bessel-Thomson and
//! Legendre), described by their poles alone.
//!
//! For an all-pole H = E(0)/E(s) with max |H| = 1 at DC,
//! |H(jw)|^2 = 1/(1 + eps^2 R(w)^2) gives
//! eps^2 R(-js)^2 = E(s)E(-s)/E(0)^2 - 1, so the roots of
//! e^2 R^2 + ... that synthesis asks for follow from the poles: with
//! t = s^2, E(s)E(-s) = prod(p_i^2 - t), and the roots of
//! 1 + e^2 R^2 = 0 are those of prod(1 - t/p_i^2) = 1 - (eps/e)^2. The
//! product keeps its relative accuracy at every t (no expanded
//! coefficients), which is why the level roots are taken from it.
//!
//! Invariant: `poles` are the prototype's (level 1) poles, closed under
//! conjugation, real ones first; every root list returned has the same
//! form.

use super::characteristic::Standard;
use super::roots::{aberth, conjugate_closed, left_sqrt};
use num_complex::Complex64;

/// An all-pole characteristic function given by its poles.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct AllPole {
    /// The poles at the prototype's ripple factor `eps`.
    pub(crate) poles: Vec<Complex64>,
    /// The ripple factor the poles belong to (R(1)^2 = 1).
    pub(crate) eps: f64,
    /// Order of the zero of R(w)^2 at DC in w^2: 1 where the loss rises
    /// like w^2 (Bessel, odd Legendre), 2 where like w^4 (even Legendre,
    /// whose loss function has a factor (1 + x)^2 by construction).
    pub(crate) dc_order: usize,
}

impl AllPole {
    /// The left-half-plane roots of prod(1 - t/p_i^2) = keep, t = s^2,
    /// less `dc_order` roots at t = 0 when `keep` is 1 (the level-0
    /// reflection zeros, whose DC part the caller adds).
    fn roots_at(&self, keep: f64, deflate: usize) -> Vec<Complex64> {
        let squares: Vec<Complex64> = self.poles.iter().map(|p| p * p).collect();
        // Start from the poles' own t values (the roots at keep = 0), the
        // ones nearest DC dropped for the deflated roots there.
        let mut starts = squares.clone();
        starts.sort_by(|a, b| a.norm().total_cmp(&b.norm()));
        let starts = starts.split_off(deflate);
        let value_slope = |t: Complex64| {
            // The product rule factor by factor: exact also where t equals
            // a pole's square (where the starts are).
            let (product, df) =
                squares
                    .iter()
                    .fold((Complex64::ONE, Complex64::ZERO), |(product, slope), q| {
                        let factor = 1.0 - t / q;
                        (product * factor, slope * factor - product / q)
                    });
            let f = product - keep;
            if deflate == 0 {
                (f, df)
            } else {
                // g = f / t^m: g / g' = 1 / (f'/f - m/t).
                let tm = t.powu(deflate as u32);
                (f / tm, (df - f * deflate as f64 / t) / tm)
            }
        };
        conjugate_closed(&aberth(starts, value_slope))
            .into_iter()
            .map(left_sqrt)
            .collect()
    }
}

impl Standard for AllPole {
    fn roots(&self, eps: f64) -> Vec<Complex64> {
        if eps == self.eps {
            return self.poles.clone();
        }
        let level = (self.eps / eps).powi(2);
        self.roots_at(1.0 - level, 0)
    }

    /// `dc_order` zeros at DC, then the left-half-plane zeros of R.
    fn reflection_zeros(&self) -> Vec<Complex64> {
        let mut zeros = vec![Complex64::ZERO; self.dc_order];
        zeros.extend(self.roots_at(1.0, self.dc_order));
        zeros
    }

    fn transmission_zeros(&self) -> Vec<f64> {
        Vec::new()
    }

    fn stopband_edge(&self) -> Option<f64> {
        None
    }
}

/// The loss -20 log10 |H(jw)| of the all-pole H with H(0) = 1 and these
/// poles, dB: 10 sum log10(|jw - p|^2 / |p|^2), each factor as
/// ln_1p((w^2 - 2 w Im p) / |p|^2) so that a small loss keeps its digits.
pub(crate) fn loss_db(poles: &[Complex64], w: f64) -> f64 {
    let nepers: f64 = poles
        .iter()
        .map(|p| (w * (w - 2.0 * p.im) / p.norm_sqr()).ln_1p())
        .sum();
    nepers * 10.0 / std::f64::consts::LN_10
}

/// The frequency at which the monotonic all-pole loss of `poles` reaches
/// `loss_db`, by bisection on log w to the last bit (the loss is
/// increasing for the families that use it: Bessel, Legendre).
pub(crate) fn edge_for(poles: &[Complex64], loss: f64) -> f64 {
    let (mut lo, mut hi) = (1.0, 1.0);
    while loss_db(poles, hi) < loss && hi < f64::MAX / 4.0 {
        hi *= 2.0;
    }
    while loss_db(poles, lo) >= loss && lo > f64::MIN_POSITIVE * 4.0 {
        lo /= 2.0;
    }
    loop {
        let mid = (lo * hi).sqrt();
        if !(mid > lo && mid < hi) {
            return if loss_db(poles, hi) - loss < loss - loss_db(poles, lo) {
                hi
            } else {
                lo
            };
        }
        if loss_db(poles, mid) < loss {
            lo = mid;
        } else {
            hi = mid;
        }
    }
}

//! Building a [`Prototype`] from [`Params`], and what synthesis asks of it.
//!
//! Invariants of every prototype built here: the poles are the n
//! left-half-plane roots of 1 + eps^2 R^2 = 0, the zeros are the finite
//! transmission zeros as +-jw pairs, and the gain makes the loss at DC
//! 10 log10(1 + eps^2 R(0)^2) with R(0)^2 exactly 0 or 1, so that
//! |H(j1)|^2 = 1/(1 + eps^2) (R(1)^2 = 1) and max |H(jw)| = 1.

use super::characteristic::Characteristic;
use super::decibel::ripple_factor;
use super::error::{check_attenuation, check_ripple, ApproxError};
use super::{Family, Params, Prototype, Variant, Zpk};
use num_complex::Complex64;

impl Prototype {
    /// Builds the approximation `params` describe.
    ///
    /// Errors on an order of 0 or above [`Family::max_order`], a ripple
    /// outside [`super::MIN_RIPPLE_DB`]..=[`super::MAX_LEVEL_DB`], an
    /// elliptic or inverse Chebyshev attenuation not above the ripple (or
    /// above `MAX_LEVEL_DB`), a modified variant on an odd order or on a
    /// family it does not modify ([`Variant::ZeroAtInfinity`]: elliptic and
    /// inverse Chebyshev; [`Variant::ReflectionAtDc`]: Chebyshev and
    /// elliptic).
    pub fn new(params: Params) -> Result<Prototype, ApproxError> {
        validate(&params)?;
        let eps = ripple_factor(params.passband_ripple_db);
        let characteristic = Characteristic::new(&params);
        let transmission_zeros = characteristic.transmission_zeros();
        let poles = characteristic.roots(eps);
        check_poles(&params, &poles)?;
        // Exact by construction: sin(0) = 0, and the map sends Z to 0 exactly.
        let dc_reflection = characteristic.reflection_zeros().contains(&Complex64::ZERO);
        let gain = dc_gain(&poles, &transmission_zeros, eps, dc_reflection);
        let zeros = transmission_zeros
            .iter()
            .flat_map(|&w| [Complex64::new(0.0, w), Complex64::new(0.0, -w)])
            .collect();
        Ok(Prototype {
            params,
            eps,
            zpk: Zpk { zeros, poles, gain },
            stopband_edge: characteristic.stopband_edge(),
            transmission_zeros,
            characteristic,
        })
    }

    /// The n roots a ladder's reflection polynomial F(s) needs, for a flat
    /// loss `level`:
    /// - `level` = 0: the zeros of R(w) on the jw axis, with multiplicity,
    ///   as s-plane points (+-j w_r, a single 0 for odd orders, a double 0
    ///   for [`Variant::ReflectionAtDc`], n zeros at 0 for Butterworth);
    /// - `level` > 0: the n left-half-plane roots of
    ///   eps^2 R(-js)^2 + level = 0, in conjugate pairs: the poles of the
    ///   same characteristic function with eps replaced by eps/sqrt(level).
    ///   `level` = 1 gives exactly `zpk.poles`, in the same order.
    ///
    /// Synthesis uses `level` in [0, 1). A negative or NaN level is treated
    /// as 0; `level` must be finite.
    pub fn reflection_roots(&self, level: f64) -> Vec<Complex64> {
        if level > 0.0 {
            self.characteristic.roots(self.eps / level.sqrt())
        } else {
            self.characteristic.reflection_zeros()
        }
    }

    /// The group delay -d arg H(jw) / dw at the normalized frequency `w`,
    /// seconds at the 1 rad/s edge, exact from the zpk: the sum over the
    /// poles of -Re p / |jw - p|^2, less the same over the zeros (which
    /// add nothing on the jw axis, where every zero here lies).
    pub fn group_delay(&self, w: f64) -> f64 {
        let s = Complex64::new(0.0, w);
        let term = |p: &Complex64| -p.re / (s - p).norm_sqr();
        self.zpk.poles.iter().map(term).sum::<f64>() - self.zpk.zeros.iter().map(term).sum::<f64>()
    }

    /// The loss -20 log10 |H(jw)| at the normalized frequency `w` (rad/s),
    /// evaluated from the zpk; +infinity at a transmission zero.
    pub fn attenuation_db(&self, w: f64) -> f64 {
        -20.0 * self.zpk.eval(Complex64::new(0.0, w)).norm().log10()
    }
}

/// The gain that makes H(0) = 1/sqrt(1 + eps^2 R(0)^2):
/// prod(-p) / prod(-z), over sqrt(1 + eps^2) unless R(0) = 0 (scipy's
/// normalization in `cheb1ap` and `ellipap`).
fn dc_gain(poles: &[Complex64], zeros: &[f64], eps: f64, dc_reflection: bool) -> f64 {
    let poles: Complex64 = poles.iter().map(|p| -p).product();
    let zeros: f64 = zeros.iter().map(|w| w * w).product();
    let at_dc = poles.re / zeros;
    if dc_reflection {
        at_dc
    } else {
        at_dc / (1.0 + eps * eps).sqrt()
    }
}

/// Accepts an order from 1 to the family's largest.
pub(crate) fn check_order(family: Family, order: usize) -> Result<(), ApproxError> {
    let max = family.max_order();
    if order == 0 || order > max {
        return Err(ApproxError::OrderOutOfRange { family, order, max });
    }
    Ok(())
}

fn validate(params: &Params) -> Result<(), ApproxError> {
    check_order(params.family, params.order)?;
    check_ripple(params.passband_ripple_db)?;
    if params.family.finite_zeros() {
        check_attenuation(params.passband_ripple_db, params.stopband_attenuation_db)?;
    }
    check_variant(params)
}

/// The n poles, finite and strictly in the left half plane: the families
/// found by iteration (Bessel, Legendre) are checked to have converged
/// (tests/approx.rs shows they do for every order and level in range, so
/// this is a program fault, not an input error).
fn check_poles(params: &Params, poles: &[Complex64]) -> Result<(), ApproxError> {
    let stable = poles
        .iter()
        .all(|p| p.re < 0.0 && p.re.is_finite() && p.im.is_finite());
    if poles.len() == params.order && stable {
        Ok(())
    } else {
        Err(ApproxError::RootsNotFound {
            family: params.family,
            order: params.order,
        })
    }
}

fn check_variant(params: &Params) -> Result<(), ApproxError> {
    let accepted: &'static [Family] = match params.variant {
        Variant::Standard => return Ok(()),
        Variant::ZeroAtInfinity => &[Family::Elliptic, Family::InverseChebyshev],
        Variant::ReflectionAtDc => &[Family::Chebyshev, Family::Elliptic],
    };
    if !accepted.contains(&params.family) {
        return Err(ApproxError::VariantNotForFamily {
            variant: params.variant,
            family: params.family,
            accepted,
        });
    }
    if params.order % 2 == 1 {
        return Err(ApproxError::VariantNeedsEvenOrder {
            variant: params.variant,
            order: params.order,
        });
    }
    Ok(())
}

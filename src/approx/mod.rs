//! Approximations of the normalized lowpass response and minimum order.
//!
//! Normalization: the passband edge is 1 rad/s, where the response has
//! fallen by exactly the passband ripple `Ap` (Chebyshev, elliptic) or by
//! the stated edge attenuation (Butterworth; 3.0103 dB is the classical
//! half-power point). The maximum of |H(jw)| is 1.
//!
//! The squared magnitude is written with the characteristic function
//! `R(w)`: |H(jw)|^2 = 1 / (1 + eps^2 R(w)^2), with `R(1)^2 = 1` for every
//! family and variant. Synthesis ([`crate::synth`]) needs, beside the poles,
//! the roots of `eps^2 R^2 + level = 0` for a level between 0 and 1 (the
//! reflection zeros of a ladder with a flat loss); [`Prototype`] provides
//! both.

use num_complex::Complex64;

mod allpole;
mod bessel;
mod butterworth;
mod characteristic;
mod decibel;
mod equiripple;
mod error;
mod inverse;
mod jacobi;
mod legendre;
mod order;
mod prototype;
mod roots;
mod scalar;
mod variant;

pub use bessel::BesselScale;
pub use error::ApproxError;
pub use order::{min_order, ORDER_TOLERANCE};

/// Largest order the approximation computes, for every family. The
/// all-pole poles come from closed forms and stay accurate far beyond this
/// (2e-14 relative against scipy at 25); the elliptic zpk of every fixture
/// mask, standard and modified, stays within 2e-14 relative of a 40-digit
/// mpmath oracle up to 25 (tests/approx.rs), even where the transition
/// 1/k - 1 falls below double resolution. What high orders do limit is
/// the response itself (for a transition under about 1e-8 the loss near
/// the band edge cannot be evaluated from any double-precision zpk to
/// better than about 1e-7 dB) and the ladder synthesis, whose own limits
/// are [`crate::synth::max_order`].
pub const MAX_ORDER: usize = 25;

/// Smallest accepted passband ripple, dB. Below this (a reflection
/// coefficient under 5e-7) no double-precision ladder could realize the
/// difference, and such a value is surely a unit mistake; it also keeps
/// 1/eps far from overflow.
pub const MIN_RIPPLE_DB: f64 = 1e-12;

/// Largest accepted ripple or attenuation, dB: 15 decades of amplitude,
/// beyond any analog filter, and 10^(dB/10) stays far from overflow.
pub const MAX_LEVEL_DB: f64 = 300.0;

/// The approximation family.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Family {
    /// Maximally flat magnitude.
    Butterworth,
    /// Chebyshev type I: equiripple passband, monotonic stopband.
    Chebyshev,
    /// Elliptic (Cauer): equiripple passband and stopband.
    Elliptic,
    /// Bessel-Thomson: maximally flat group delay.
    Bessel,
    /// Inverse Chebyshev (Chebyshev type II): monotonic passband,
    /// equiripple stopband.
    InverseChebyshev,
    /// Legendre (Papoulis' optimum monotonic): the steepest monotonic
    /// passband edge of its order.
    Legendre,
}

/// Every family, in the order a table lists them.
pub const FAMILIES: [Family; 6] = [
    Family::Butterworth,
    Family::Chebyshev,
    Family::Elliptic,
    Family::Bessel,
    Family::InverseChebyshev,
    Family::Legendre,
];

impl Family {
    /// The largest order [`Prototype::new`] and [`min_order`] accept.
    pub fn max_order(self) -> usize {
        MAX_ORDER
    }

    /// Whether the passband ripples (Chebyshev, elliptic): an even order
    /// then keeps the ripple loss at DC.
    pub fn equiripple_passband(self) -> bool {
        matches!(self, Family::Chebyshev | Family::Elliptic)
    }

    /// Whether the family has finite transmission zeros (elliptic, inverse
    /// Chebyshev): it needs a stopband attenuation, and its standard even
    /// orders keep a finite gain at infinity that no ladder realizes.
    pub fn finite_zeros(self) -> bool {
        matches!(self, Family::Elliptic | Family::InverseChebyshev)
    }
}

impl std::fmt::Display for Family {
    /// The family as the trade writes it.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Family::Butterworth => "Butterworth",
            Family::Chebyshev => "Chebyshev",
            Family::Elliptic => "elliptic",
            Family::Bessel => "Bessel",
            Family::InverseChebyshev => "inverse Chebyshev",
            Family::Legendre => "Legendre",
        })
    }
}

/// The passband edge of a Bessel response of this order and edge loss,
/// relative to what else may fix its frequency scale: edge (rad/s) times
/// the DC group delay (s) for [`BesselScale::DcDelay`], edge over the
/// asymptote frequency for [`BesselScale::Asymptote`].
///
/// Errors on an order or edge loss out of range.
pub fn bessel_edge_ratio(
    order: usize,
    ripple_db: f64,
    scale: BesselScale,
) -> Result<f64, ApproxError> {
    prototype::check_order(Family::Bessel, order)?;
    error::check_ripple(ripple_db)?;
    Ok(bessel::edge_ratio(order, ripple_db, scale))
}

/// Which form of the characteristic function an even order uses.
///
/// A doubly terminated LC ladder cannot realize every even-order response:
/// the standard even-order elliptic keeps a finite gain at infinity (needs
/// coupled coils), and the standard even-order Chebyshev or elliptic has a
/// ripple maximum of loss at DC, so it needs unequal terminations. The
/// modified forms come from the frequency transformation of w^2 used by
/// Saal (1963) for his types B and C (from memory).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Variant {
    /// The classical form (scipy's for every order).
    Standard,
    /// Even elliptic or inverse Chebyshev: the highest transmission zero
    /// moved to infinity (Saal's type B), so that a ladder realizes it.
    /// The elliptic keeps its ripple loss at DC (unequal terminations);
    /// the inverse Chebyshev has none (any terminations).
    ZeroAtInfinity,
    /// Even Chebyshev or elliptic: additionally the lowest reflection zero
    /// moved to DC (Saal's type C), so equal terminations work.
    ReflectionAtDc,
}

impl std::fmt::Display for Variant {
    /// The form in words, with why a modified form is used.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Variant::Standard => "standard form",
            Variant::ZeroAtInfinity => {
                "modified even-order form: highest transmission zero moved to infinity, which a ladder needs"
            }
            Variant::ReflectionAtDc => {
                "modified even-order form: lowest reflection zero moved to DC, so the terminations may be equal"
            }
        })
    }
}

/// Zeros, poles and gain of a rational transfer function of `s`.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Zpk {
    /// Finite zeros.
    pub zeros: Vec<Complex64>,
    /// Poles, all in the left half plane for a stable filter.
    pub poles: Vec<Complex64>,
    /// Multiplier: H(s) = gain * prod(s - z) / prod(s - p).
    pub gain: f64,
}

impl Zpk {
    /// Evaluates H(s).
    ///
    /// Each zero factor is divided by a pole factor as it comes, so no
    /// partial product grows like |s|^n: a separate numerator and
    /// denominator overflow (complex division squares the divisor's norm)
    /// already at |s| = 1e9 for order 18.
    pub fn eval(&self, s: Complex64) -> Complex64 {
        let mut zeros = self.zeros.iter();
        let mut poles = self.poles.iter();
        let mut h = Complex64::new(self.gain, 0.0);
        loop {
            h = match (zeros.next(), poles.next()) {
                (Some(z), Some(p)) => h * ((s - z) / (s - p)),
                (Some(z), None) => h * (s - z),
                (None, Some(p)) => h / (s - p),
                (None, None) => return h,
            };
        }
    }
}

/// Everything that fixes an approximation once its order is known.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Params {
    /// The family.
    pub family: Family,
    /// The order (number of poles), at least 1.
    pub order: usize,
    /// Passband ripple (Chebyshev, elliptic) or loss at the passband edge
    /// (the monotonic families), dB, greater than 0.
    pub passband_ripple_db: f64,
    /// Minimum stopband attenuation, dB (the families with finite
    /// transmission zeros only; ignored otherwise).
    pub stopband_attenuation_db: f64,
    /// The form; only even orders may use a modified one.
    pub variant: Variant,
}

/// A normalized lowpass approximation (passband edge 1 rad/s).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Prototype {
    /// What it was built from.
    pub params: Params,
    /// The ripple factor: eps = sqrt(10^(Ap/10) - 1).
    pub eps: f64,
    /// H(s), with max |H(jw)| = 1.
    pub zpk: Zpk,
    /// Finite transmission zeros w > 0 (rad/s), ascending; each stands for
    /// the pair +-jw. Empty for the all-pole families.
    pub transmission_zeros: Vec<f64>,
    /// Normalized frequency at which the stopband attenuation is first
    /// reached (elliptic: 1/k; inverse Chebyshev: cosh(acosh(eps_s/eps)/n);
    /// moved outwards by a modified variant), or `None` for the all-pole
    /// families.
    pub stopband_edge: Option<f64>,
    /// The characteristic function, kept for [`Prototype::reflection_roots`].
    #[serde(skip)]
    characteristic: characteristic::Characteristic,
}

//! The characteristic function R(w) of a prototype: a standard family,
//! optionally pushed through a frequency transformation of w^2.
//!
//! Invariants: every list of roots is in the closed left half plane and
//! closed under conjugation, pairs adjacent, the real root (if any) first;
//! jw-axis quantities are plain frequencies until they leave this module.

use super::allpole::AllPole;
use super::butterworth::Butterworth;
use super::equiripple::Equiripple;
use super::inverse::InverseChebyshev;
use super::legendre::{self, LossPolynomial};
use super::variant::FrequencyMap;
use super::{bessel, decibel::ripple_factor};
use super::{Family, Params, Variant};
use num_complex::Complex64;

/// What each standard family provides.
pub(crate) trait Standard {
    /// The n left-half-plane roots of 1 + eps^2 R(-js)^2 = 0.
    fn roots(&self, eps: f64) -> Vec<Complex64>;
    /// The n zeros of R(-js) as s-plane points, with multiplicity: +-jw
    /// pairs and DC for the families whose R vanishes only on the jw axis,
    /// left-half-plane points where R has complex zeros (Bessel, Legendre;
    /// any half plane gives a ladder, the left one the minimum-phase
    /// reflection).
    fn reflection_zeros(&self) -> Vec<Complex64>;
    /// The poles of R, w > 0 ascending, each for the pair +-jw.
    fn transmission_zeros(&self) -> Vec<f64>;
    /// Where the loss first reaches the stopband attenuation (elliptic).
    fn stopband_edge(&self) -> Option<f64>;
}

/// The normalized ripple grid x = j/n with n - j odd, ascending: x = 0 (odd
/// orders) marks the real root, every other x a conjugate pair.
pub(crate) fn ripple_grid(order: usize) -> impl Iterator<Item = f64> {
    (0..order)
        .filter(move |j| (order - j) % 2 == 1)
        .map(move |j| j as f64 / order as f64)
}

/// Expands upper-half-plane roots with their conjugates; a root with an
/// exactly zero imaginary part (constructed so) stands alone.
pub(crate) fn with_conjugates(upper: impl Iterator<Item = Complex64>) -> Vec<Complex64> {
    upper
        .flat_map(|p| {
            let conjugate = (p.im != 0.0).then(|| p.conj());
            std::iter::once(p).chain(conjugate)
        })
        .collect()
}

/// The +-jw pairs of jw-axis zero frequencies w >= 0 (a single point for
/// each 0).
pub(crate) fn on_axis(frequencies: impl Iterator<Item = f64>) -> Vec<Complex64> {
    frequencies
        .flat_map(|w| {
            let mirror = (w != 0.0).then_some(-w);
            std::iter::once(w).chain(mirror)
        })
        .map(|w| Complex64::new(0.0, w))
        .collect()
}

/// One of the standard families.
#[derive(Debug, Clone, PartialEq)]
enum Shape {
    Butterworth(Butterworth),
    Equiripple(Equiripple),
    Inverse(InverseChebyshev),
    AllPole(AllPole),
}

/// A validated prototype's characteristic function.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Characteristic {
    shape: Shape,
    /// `None` for [`Variant::Standard`].
    map: Option<FrequencyMap>,
}

impl Characteristic {
    /// Builds the function `params` describe; `params` must be valid.
    pub(crate) fn new(params: &Params) -> Characteristic {
        let shape = match params.family {
            Family::Butterworth => Shape::Butterworth(Butterworth {
                order: params.order,
            }),
            Family::Chebyshev => Shape::Equiripple(Equiripple::chebyshev(params.order)),
            Family::Elliptic => Shape::Equiripple(Equiripple::elliptic(
                params.order,
                params.passband_ripple_db,
                params.stopband_attenuation_db,
            )),
            Family::InverseChebyshev => Shape::Inverse(InverseChebyshev::new(
                params.order,
                params.passband_ripple_db,
                params.stopband_attenuation_db,
            )),
            Family::Bessel => {
                Shape::AllPole(bessel::bessel(params.order, params.passband_ripple_db))
            }
            Family::Legendre => {
                let eps = ripple_factor(params.passband_ripple_db);
                let loss = LossPolynomial::new(params.order);
                Shape::AllPole(AllPole {
                    poles: legendre::poles(&loss, params.order, eps),
                    eps,
                    dc_order: if params.order.is_multiple_of(2) { 2 } else { 1 },
                })
            }
        };
        let mut characteristic = Characteristic { shape, map: None };
        if params.variant != Variant::Standard {
            let standard = characteristic.standard();
            characteristic.map = Some(FrequencyMap::new(
                params.variant,
                &standard.reflection_zeros(),
                &standard.transmission_zeros(),
            ));
        }
        characteristic
    }

    fn standard(&self) -> &dyn Standard {
        match &self.shape {
            Shape::Butterworth(b) => b,
            Shape::Equiripple(e) => e,
            Shape::Inverse(i) => i,
            Shape::AllPole(a) => a,
        }
    }

    /// The n left-half-plane roots of 1 + eps^2 R(-js)^2 = 0.
    pub(crate) fn roots(&self, eps: f64) -> Vec<Complex64> {
        let roots = self.standard().roots(eps);
        match &self.map {
            None => roots,
            Some(map) => roots.into_iter().map(|s| map.root(s)).collect(),
        }
    }

    /// The n zeros of R as s-plane points (see [`Standard`]); a map moves
    /// the jw-axis ones (the only kind the mapped families have).
    pub(crate) fn reflection_zeros(&self) -> Vec<Complex64> {
        let zeros = self.standard().reflection_zeros();
        match &self.map {
            None => zeros,
            Some(map) => zeros
                .into_iter()
                .map(|z| Complex64::new(0.0, map.frequency(z.im)))
                .collect(),
        }
    }

    /// Finite transmission zeros w > 0, ascending (each for +-jw).
    pub(crate) fn transmission_zeros(&self) -> Vec<f64> {
        let zeros = self.standard().transmission_zeros();
        match &self.map {
            None => zeros,
            Some(map) => map.transmission_zeros(&zeros),
        }
    }

    /// The edge of the realized stopband, mapped with the response.
    pub(crate) fn stopband_edge(&self) -> Option<f64> {
        let edge = self.standard().stopband_edge()?;
        Some(self.map.as_ref().map_or(edge, |map| map.frequency(edge)))
    }
}

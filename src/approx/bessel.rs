//! Bessel-Thomson: the maximally flat group delay.
//!
//! With unit delay at DC, H(s) = theta_n(0)/theta_n(s) for the reverse
//! Bessel polynomial theta_n(s) = sum a_k s^k,
//! a_k = (2n - k)! / (2^(n-k) k! (n - k)!) (W. E. Thomson, "Delay networks
//! having maximally flat frequency characteristics", Proc. IEE 96, 1949;
//! from memory), which satisfies theta_n = (2n - 1) theta_(n-1) +
//! s^2 theta_(n-2). The recurrence evaluates it without its coefficients
//! (up to 6e31 at n = 25) and without cancellation in the left half plane.
//!
//! Three normalizations are in use (scipy.signal's `besselap` names them
//! `delay`, `phase` and `mag`): unit delay at DC; the product of the poles
//! 1, so that the high-frequency asymptote is 1/s^n (the `asymptote` here);
//! and the loss Ap at w = 1, which is the prototype nocoil synthesizes
//! (its passband edge is where the loss first reaches the ripple, as for
//! every family). The first two fix the frequency scale of a design
//! through [`edge_ratio`].

use super::allpole::{edge_for, AllPole};
use super::decibel::ripple_factor;
use super::roots::{aberth, conjugate_closed};
use num_complex::{Complex, Complex64};
use num_traits::Num;
use std::f64::consts::PI;
use twofloat::TwoFloat;

/// What fixes the frequency scale of a Bessel design besides its
/// passband edge.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BesselScale {
    /// The group delay at DC, seconds.
    DcDelay,
    /// The frequency where the high-frequency asymptote |H| = (w0/w)^n
    /// reaches 1 (the geometric mean of the pole magnitudes).
    Asymptote,
}

/// theta_n(s) and its derivative, by the three-term recurrence, in `T`
/// (f64 for the search, double-double for the polish).
fn theta<T>(order: usize, s: Complex<T>) -> (Complex<T>, Complex<T>)
where
    T: Clone + Num + From<f64>,
{
    let real = |x: f64| Complex::new(T::from(x), T::from(0.0));
    let s2 = s.clone() * s.clone();
    // (theta_(k-2), theta_(k-1)) and their derivatives, from k = 2.
    let (mut t0, mut t1) = (real(1.0), s.clone() + real(1.0));
    let (mut d0, mut d1) = (real(0.0), real(1.0));
    for k in 2..=order {
        let c = real((2 * k - 1) as f64);
        let t2 = t1.clone() * c.clone() + s2.clone() * t0.clone();
        let d2 = d1.clone() * c + s.clone() * real(2.0) * t0 + s2.clone() * d0;
        (t0, t1, d0, d1) = (t1, t2, d1, d2);
    }
    (t1, d1)
}

/// Most Newton steps in double-double after the f64 search. The inner
/// poles (nearest the negative real axis) are badly conditioned: a
/// relative change of 1e-16 in the coefficients moves them by up to 5e-11
/// at n = 12 and 7e-4 at n = 25 (condition numbers from 60-digit mpmath),
/// so the f64 search leaves them that far off; from there Newton's
/// quadratic convergence needs four steps to reach f64 rounding, and the
/// polish stops as soon as a step is below it.
const POLISH_STEPS: usize = 8;

/// One root of theta_n polished in double-double.
fn polished(order: usize, root: Complex64) -> Complex64 {
    let dd = |x: f64| TwoFloat::from(x);
    let mut z = Complex::new(dd(root.re), dd(root.im));
    for _ in 0..POLISH_STEPS {
        let (p, dp) = theta(order, z);
        let to_f64 = |c: Complex<TwoFloat>| Complex64::new(c.re.hi(), c.im.hi());
        let step = to_f64(p) / to_f64(dp);
        if !(step.re.is_finite() && step.im.is_finite()) {
            break;
        }
        z -= Complex::new(dd(step.re), dd(step.im));
        if step.norm() <= f64::EPSILON * f64::EPSILON * root.norm() {
            break;
        }
    }
    Complex64::new(z.re.hi(), z.im.hi())
}

/// The poles of the Bessel filter of unit delay at DC, real first, then
/// conjugate pairs. Started from the Butterworth poles on the circle of
/// radius theta_n(0)^(1/n), the geometric mean of the roots.
pub(crate) fn unit_delay_poles(order: usize) -> Vec<Complex64> {
    let n = order as f64;
    // theta_n(0) = (2n - 1)!!, summed in logarithms.
    let radius = ((1..=order).map(|k| ((2 * k - 1) as f64).ln()).sum::<f64>() / n).exp();
    let starts = (1..=order)
        .map(|k| Complex64::from_polar(radius, PI / 2.0 + (2 * k - 1) as f64 * PI / (2.0 * n)))
        .collect();
    let found = aberth(starts, |s| theta(order, s));
    conjugate_closed(
        &found
            .into_iter()
            .map(|z| polished(order, z))
            .collect::<Vec<_>>(),
    )
}

/// The poles of the phase (asymptote) normalization: product of the
/// magnitudes 1.
fn asymptote_poles(order: usize) -> Vec<Complex64> {
    let poles = unit_delay_poles(order);
    let mean = (poles.iter().map(|p| p.norm().ln()).sum::<f64>() / order as f64).exp();
    poles.into_iter().map(|p| p / mean).collect()
}

/// The prototype's characteristic: the unit-delay poles scaled so that the
/// loss at w = 1 is `ripple_db`.
pub(crate) fn bessel(order: usize, ripple_db: f64) -> AllPole {
    let unit = unit_delay_poles(order);
    let edge = edge_for(&unit, ripple_db);
    AllPole {
        poles: unit.into_iter().map(|p| p / edge).collect(),
        eps: ripple_factor(ripple_db),
        dc_order: 1,
    }
}

/// The passband edge of the Bessel filter of this order and ripple (the
/// frequency where its loss reaches `ripple_db`), in units of the scale:
/// edge (rad/s) times the DC delay (s) for [`BesselScale::DcDelay`],
/// edge over the asymptote frequency for [`BesselScale::Asymptote`].
pub(crate) fn edge_ratio(order: usize, ripple_db: f64, scale: BesselScale) -> f64 {
    let poles = match scale {
        BesselScale::DcDelay => unit_delay_poles(order),
        BesselScale::Asymptote => asymptote_poles(order),
    };
    edge_for(&poles, ripple_db)
}

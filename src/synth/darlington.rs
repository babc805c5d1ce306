//! Darlington synthesis: from the natural frequencies, the reflection
//! zeros and the transmission zeros to the element values of the ladder.
//!
//! With E(s) = prod(s - p) over the poles and F(s) = c prod(s - f) over
//! the reflection zeros, S11 = F/E and the input impedance (source 1 ohm)
//! is Z = (E + F)/(E - F) (Temes and LaPatra 1977, from memory). Every
//! ladder here has S21 = 0 at infinity, so |F/E| -> 1 there and |c| = 1
//! exactly: c = +1 makes Z grow like s L (series inductor first,
//! `MinCapacitor`), c = -1 makes Z vanish like 1/(s C) (shunt capacitor
//! first, `MinInductor`).
//! In both cases the *primary* immittance (Z, or Y = 1/Z) is
//! (E + F^)/(E - F^) with the monic F^ = prod(s - f), and its DC value is
//! rho = r or 1/r: the two forms are one synthesis read two ways.
//!
//! Choice of the reflection zeros: as given (the prototype supplies them
//! in the left half plane or on the jw axis), except that when the sign of
//! S11(0) = F^(0)/E(0) disagrees with (rho - 1)/(rho + 1), the real zero of
//! an odd order is mirrored into the right half plane. Even orders have no
//! real reflection zero (level > 0) or a sign fixed by the jw-axis zeros
//! (level 0), so their orientation is fixed: see
//! [`SynthError::EvenOrderOrientation`].

use super::ends::ladder_arms;
use super::poly::{cdd, cdiv, div, Cdd, Poly};
use super::{Form, Ladder, SynthError};
use num_complex::Complex64;

/// Largest relative imaginary residue accepted when a root set is
/// expanded into a real polynomial. Roots computed as exact conjugates
/// leave none; roots rounded independently leave about 1e-16; a set that
/// misses a partner leaves a residue of order 1.
const CONJUGATE_TOLERANCE: f64 = 1e-10;

/// Largest difference accepted between |S11| from the roots and |S11| that
/// the terminations require. It compares f64 products of n roots, good to
/// about n * 1e-16; a difference of 1e-9 in |S11| moves the transmission
/// by under 1e-8 dB, while roots taken at the wrong level miss by far more.
const REFLECTION_TOLERANCE: f64 = 1e-9;

/// The roots that fix a doubly terminated lowpass ladder, at the flat-loss
/// level its terminations need.
#[derive(Debug, Clone, PartialEq)]
pub struct Characteristic {
    /// The n natural frequencies (zeros of E), strictly in the left half
    /// plane, closed under conjugation.
    pub poles: Vec<Complex64>,
    /// The n reflection zeros (zeros of F), closed under conjugation: the
    /// roots of eps^2 R(-js)^2 + level in the left half plane, or on the jw
    /// axis when the level is 0.
    pub reflection_zeros: Vec<Complex64>,
    /// Finite transmission zeros w > 0, rad/s, each standing for the pair
    /// +-jw; fewer than n/2 of them (the rest are at infinity).
    pub transmission_zeros: Vec<f64>,
    /// |H(0)| of the response the ladder realizes up to its flat gain.
    pub dc_gain: f64,
}

/// Synthesizes the ladder of `ch` between a 1 ohm source and a load of
/// `load_ratio` ohm, in the requested dual form.
///
/// The reflection zeros must belong to this ratio: |S11(0)| has to be
/// |r - 1|/(r + 1). The ladder's flat gain is `r / ((1 + r) dc_gain)`.
pub fn synthesize_characteristic(
    ch: &Characteristic,
    load_ratio: f64,
    form: Form,
) -> Result<Ladder, SynthError> {
    check_ratio(load_ratio)?;
    validate(ch)?;
    let rho = match form {
        Form::MinCapacitor => load_ratio,
        Form::MinInductor => 1.0 / load_ratio,
    };
    let f_roots = oriented_reflection_zeros(ch, rho, form, load_ratio)?;
    check_dc_reflection(&ch.poles, &f_roots, rho)?;
    let f = real_poly(
        &f_roots.iter().copied().map(cdd).collect::<Vec<_>>(),
        "reflection zeros",
    )?;
    let e = real_poly(
        &refined_poles(&ch.poles, &f, &ch.transmission_zeros)?,
        "poles",
    )?;
    let arms = ladder_arms(&e, &f, &ch.transmission_zeros, load_ratio, form)?;
    let mut ladder = Ladder::from_arms(arms, load_ratio);
    ladder.flat_gain = load_ratio / ((1.0 + load_ratio) * ch.dc_gain);
    Ok(ladder)
}

/// Accepts a positive finite termination ratio.
pub(crate) fn check_ratio(load_ratio: f64) -> Result<(), SynthError> {
    if load_ratio > 0.0 && load_ratio.is_finite() {
        Ok(())
    } else {
        Err(SynthError::InvalidLoadRatio { load_ratio })
    }
}

/// Root counts, pole stability, zero frequencies and the DC gain.
fn validate(ch: &Characteristic) -> Result<(), SynthError> {
    let n = ch.poles.len();
    if n == 0 || ch.reflection_zeros.len() != n || 2 * ch.transmission_zeros.len() >= n {
        return Err(SynthError::RootCount {
            poles: n,
            reflection_zeros: ch.reflection_zeros.len(),
            transmission_zeros: ch.transmission_zeros.len(),
        });
    }
    if let Some(p) = ch.poles.iter().find(|p| !(p.re < 0.0 && p.im.is_finite())) {
        return Err(SynthError::UnstablePole { re: p.re, im: p.im });
    }
    if let Some(&w) = ch
        .transmission_zeros
        .iter()
        .find(|w| !(**w > 0.0 && w.is_finite()))
    {
        return Err(SynthError::InvalidTransmissionZero { w });
    }
    if !(ch.dc_gain > 0.0 && ch.dc_gain.is_finite()) {
        return Err(SynthError::InvalidDcGain {
            dc_gain: ch.dc_gain,
        });
    }
    Ok(())
}

/// The reflection zeros with the orientation that makes the primary
/// immittance equal `rho` at DC (see the module doc).
fn oriented_reflection_zeros(
    ch: &Characteristic,
    rho: f64,
    form: Form,
    load_ratio: f64,
) -> Result<Vec<Complex64>, SynthError> {
    let mut roots = ch.reflection_zeros.clone();
    // sign(S11(0)) = sign(F^(0)), since E(0) = prod(-p) > 0 for LHP poles.
    let f0: Complex64 = roots.iter().map(|f| -f).product();
    if f0.re * (rho - 1.0) >= 0.0 {
        return Ok(roots);
    }
    let n = roots.len();
    if n.is_multiple_of(2) {
        let needs = match form {
            Form::MinCapacitor => "above",
            Form::MinInductor => "below",
        };
        return Err(SynthError::EvenOrderOrientation {
            order: n,
            form,
            load_ratio,
            inverse: 1.0 / load_ratio,
            needs,
        });
    }
    // An odd conjugate-closed set has a real member: the one with the
    // smallest relative imaginary part. Mirroring it flips the sign of F^(0).
    let real = (0..n)
        .min_by(|&i, &j| relative_im(roots[i]).total_cmp(&relative_im(roots[j])))
        .unwrap_or(0);
    roots[real] = -roots[real].conj();
    Ok(roots)
}

fn relative_im(z: Complex64) -> f64 {
    z.im.abs() / z.norm()
}

/// The real polynomial of a conjugate-closed root set.
fn real_poly(roots: &[Cdd], which: &'static str) -> Result<Poly, SynthError> {
    let (p, residue) = Poly::from_roots(roots);
    if residue <= CONJUGATE_TOLERANCE {
        Ok(p)
    } else {
        Err(SynthError::NotConjugate {
            which,
            residue,
            tolerance: CONJUGATE_TOLERANCE,
        })
    }
}

/// |S11(0)| = |prod(-f) / prod(-p)| must be |rho - 1|/(rho + 1).
fn check_dc_reflection(
    poles: &[Complex64],
    f_roots: &[Complex64],
    rho: f64,
) -> Result<(), SynthError> {
    check_reflection(poles, f_roots, 0.0, ((rho - 1.0) / (rho + 1.0)).abs())
}

/// |S11(jw)| = |prod(jw - f) / prod(jw - p)| must be `expected`.
pub(crate) fn check_reflection(
    poles: &[Complex64],
    f_roots: &[Complex64],
    w: f64,
    expected: f64,
) -> Result<(), SynthError> {
    let s = Complex64::new(0.0, w);
    let ratio: Complex64 = f_roots
        .iter()
        .zip(poles)
        .map(|(f, p)| (s - f) / (s - p))
        .product();
    let got = ratio.norm();
    if (got - expected).abs() <= REFLECTION_TOLERANCE {
        Ok(())
    } else {
        Err(SynthError::InconsistentReflection { w, expected, got })
    }
}

/// Newton steps that polish each f64 pole on the Feldtkeller polynomial.
/// Newton converges quadratically from the f64 start (1e-16 relative): one
/// step reaches the double-double level, the second and third absorb a
/// start that is a few decades worse (close poles of high orders).
const NEWTON_STEPS: usize = 3;

/// Largest move accepted while polishing a pole, relative to the pole's
/// distance from the jw axis, |Re p|: that distance sets how much the
/// move can change the response (near w = Im p, |jw - p| changes by at
/// most the move, so the loss by at most 8.7 |dp| / |Re p| dB). 1e-5 keeps
/// that below 1e-4 dB, inside the 0.001 dB budget. f64 poles of the same
/// characteristic move by 1e-14 of |p| or less for ordinary designs; the
/// high-Q poles of narrow-transition elliptics move further, because the
/// f64 rounding of the reflection zeros then fixes the poles only loosely;
/// poles of another characteristic move by far more.
const POLE_MOVE_TOLERANCE: f64 = 1e-5;

/// The poles polished so that E E* = F F* + k P P* holds to double-double
/// precision (the Feldtkeller equation; Temes and LaPatra 1977, from
/// memory), with k fixed at DC by the given poles.
///
/// Why: a ladder exists only for an exactly consistent E, F, P. The f64
/// poles violate the identity by about 1e-16 relative, which puts
/// spurious transmission zeros at large finite frequencies; the continued
/// fraction then amplifies the violation by many decades (measured: 7e-10
/// relative element error at order 10 for Butterworth, and orders above 10
/// failing the structure check). With polished poles the ladder is exact
/// for the given F and P, and only their own rounding remains.
fn refined_poles(poles: &[Complex64], f: &Poly, zeros: &[f64]) -> Result<Vec<Cdd>, SynthError> {
    let p = Poly::from_jw_pairs(zeros);
    let e0: Cdd = poles.iter().map(|z| -cdd(*z)).product();
    let k = div(e0.re * e0.re - f.coef(0) * f.coef(0), p.coef(0) * p.coef(0));
    let feldtkeller = f
        .mul(&f.mirrored())
        .add_signed(&p.mul(&p.mirrored()).scaled(k), 1.0);
    poles
        .iter()
        .map(|&start| {
            let polished = (0..NEWTON_STEPS).fold(cdd(start), |z, _| {
                let (v, d) = feldtkeller.value_and_slope(z);
                z - cdiv(v, d)
            });
            let moved = (Complex64::new(polished.re.into(), polished.im.into()) - start).norm()
                / start.re.abs();
            if moved <= POLE_MOVE_TOLERANCE {
                Ok(polished)
            } else {
                Err(SynthError::InconsistentPole {
                    re: start.re,
                    im: start.im,
                    moved,
                    tolerance: POLE_MOVE_TOLERANCE,
                })
            }
        })
        .collect()
}

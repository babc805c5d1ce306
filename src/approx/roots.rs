//! Roots of the real polynomials that have no closed-form roots (the
//! Bessel polynomial, the Legendre loss function, the flat-loss levels of
//! the all-pole families), by the Aberth-Ehrlich simultaneous iteration
//! (O. Aberth, "Iteration methods for finding all zeros of a polynomial
//! simultaneously", Math. Comp. 27, 1973; from memory).
//!
//! Every polynomial here is given as a function returning p(z) and p'(z),
//! evaluated in a form that keeps its relative accuracy (a recurrence or a
//! product of factors, never expanded coefficients of alternating sign), so
//! the roots are as accurate as the evaluation: tests/approx.rs compares
//! them with scipy.signal and with the defining identities.
//!
//! Invariant of [`conjugate_closed`]: real roots first (exactly real), then
//! each upper-half-plane root followed by its exact conjugate.

use num_complex::Complex64;

/// Iterations before the search gives up. Aberth's iteration converges
/// cubically near simple roots; from the starting points the callers use
/// (a neighbouring known root set) every order to 25 converges in under 40
/// (tests/approx.rs), so 500 only catches a start that cannot converge.
const MAX_ITERATIONS: usize = 500;

/// A correction this small relative to its root ends the iteration: a few
/// ulps, the evaluation's own rounding level.
const CONVERGED: f64 = 4.0 * f64::EPSILON;

/// Relative imaginary part below which a root of a real polynomial is
/// taken to be real. Aberth's iterates of a real root keep an imaginary part
/// of the evaluation's rounding (about 1e-15 relative); a genuine pair of
/// these polynomials is separated from the axis by far more (their roots
/// are simple, and the closest pair to the axis in any family to order 25
/// has a relative imaginary part above 1e-3).
const REAL_TOLERANCE: f64 = 1e-9;

/// The roots of a polynomial of degree `starts.len()`, from `value_slope`
/// (p and p' at a point) and distinct starting points.
///
/// Best effort: an iteration that has not converged after
/// [`MAX_ITERATIONS`] returns where it stands, and a step that is not
/// finite stops it. The callers' consumers check what matters (the
/// prototype that its poles are stable, the synthesis that the roots are
/// consistent with the response, to 1e-9), so a failure becomes a typed
/// error there rather than a panic here.
pub(crate) fn aberth(
    starts: Vec<Complex64>,
    value_slope: impl Fn(Complex64) -> (Complex64, Complex64),
) -> Vec<Complex64> {
    let mut z = starts;
    let n = z.len();
    for _ in 0..MAX_ITERATIONS {
        let mut done = true;
        for k in 0..n {
            let (p, dp) = value_slope(z[k]);
            if p == Complex64::ZERO {
                continue;
            }
            let newton = p / dp;
            let repulsion: Complex64 = (0..n)
                .filter(|&j| j != k)
                .map(|j| (z[k] - z[j]).inv())
                .sum();
            let step = newton / (1.0 - newton * repulsion);
            if !(step.re.is_finite() && step.im.is_finite()) {
                return z;
            }
            z[k] -= step;
            if step.norm() > CONVERGED * z[k].norm() {
                done = false;
            }
        }
        if done {
            break;
        }
    }
    z
}

/// The roots of a real polynomial made exactly closed under conjugation:
/// each root within [`REAL_TOLERANCE`] of the axis made real, each other
/// root paired with the conjugate nearest to it, the pair's mean kept.
/// Roots that do not pair up (an unconverged search) come back as they
/// are, for the consumer's checks to refuse.
pub(crate) fn conjugate_closed(roots: &[Complex64]) -> Vec<Complex64> {
    let is_real = |z: &Complex64| z.im.abs() <= REAL_TOLERANCE * z.norm();
    let mut real: Vec<f64> = roots.iter().filter(|z| is_real(z)).map(|z| z.re).collect();
    real.sort_by(f64::total_cmp);
    let mut upper: Vec<Complex64> = roots
        .iter()
        .filter(|z| !is_real(z) && z.im > 0.0)
        .copied()
        .collect();
    let mut lower: Vec<Complex64> = roots
        .iter()
        .filter(|z| !is_real(z) && z.im < 0.0)
        .copied()
        .collect();
    if upper.len() != lower.len() {
        return roots.to_vec();
    }
    upper.sort_by(|a, b| a.im.total_cmp(&b.im));
    let mut closed: Vec<Complex64> = real.into_iter().map(|x| Complex64::new(x, 0.0)).collect();
    for u in upper {
        let nearest = (0..lower.len())
            .min_by(|&i, &j| {
                (lower[i].conj() - u)
                    .norm()
                    .total_cmp(&(lower[j].conj() - u).norm())
            })
            .unwrap_or(0);
        let mean = (u + lower.swap_remove(nearest).conj()) / 2.0;
        closed.push(mean);
        closed.push(mean.conj());
    }
    closed
}

/// The square root with non-positive real part, computed so that both
/// parts keep full relative accuracy (the polar form loses the small real
/// part of a root close to the jw axis). Maps t = s^2 back to the left
/// half plane.
pub(crate) fn left_sqrt(z: Complex64) -> Complex64 {
    let r = z.norm();
    if r == 0.0 {
        return z;
    }
    // Principal root a + jb, a >= 0: take the larger part from r, the
    // smaller from im = 2ab.
    let (a, b) = if z.re >= 0.0 {
        let a = ((r + z.re) / 2.0).sqrt();
        (a, z.im / (2.0 * a))
    } else {
        let b = ((r - z.re) / 2.0).sqrt().copysign(z.im);
        (z.im / (2.0 * b), b)
    };
    Complex64::new(-a, -b)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The roots of a product with known roots come back to rounding, and
    /// in the conjugate-closed order.
    #[test]
    fn finds_known_roots() {
        let known = [
            Complex64::new(-0.5, 0.0),
            Complex64::new(-0.2, 1.3),
            Complex64::new(-0.2, -1.3),
            Complex64::new(-1.1, 0.4),
            Complex64::new(-1.1, -0.4),
        ];
        let value_slope = |z: Complex64| {
            let p: Complex64 = known.iter().map(|r| z - r).product();
            let slope: Complex64 = known.iter().map(|r| (z - r).inv()).sum();
            (p, p * slope)
        };
        let starts = (0..5)
            .map(|k| Complex64::from_polar(2.0, 0.4 + 1.2 * k as f64))
            .collect();
        let found = conjugate_closed(&aberth(starts, value_slope));
        assert_eq!(found[0].im, 0.0);
        assert_eq!(found[1], found[2].conj());
        for r in known {
            let nearest = found
                .iter()
                .map(|f| (f - r).norm())
                .fold(f64::MAX, f64::min);
            assert!(nearest <= 1e-14, "{r}: {nearest:e}");
        }
    }

    #[test]
    fn left_sqrt_squares_back_near_the_axis() {
        for z in [
            Complex64::new(-4.0, 1e-9),
            Complex64::new(-4.0, -1e-9),
            Complex64::new(3.0, 2.0),
        ] {
            let r = left_sqrt(z);
            assert!(r.re <= 0.0);
            assert!(((r * r) - z).norm() <= 4.0 * f64::EPSILON * z.norm());
            // the small real part is relatively exact: Re = -|im| / (2 |b|)
            if z.re < 0.0 {
                assert!((r.re + z.im.abs() / 4.0).abs() <= f64::EPSILON * z.im.abs());
            }
        }
    }
}

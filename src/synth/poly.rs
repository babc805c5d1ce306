//! Real polynomials in `s` with double-double coefficients: the arithmetic
//! of the Darlington synthesis step.
//!
//! Why double-double: the continued-fraction and zero-shifting steps
//! subtract nearly equal coefficients, and in plain f64 a ladder loses
//! about one decimal digit per order (project field notes, domain.md
//! section 2: 1.5e-3 relative element error at order 25 for a 0.1 dB
//! Chebyshev). With about 32 significant digits the only error left is
//! the f64 rounding of the roots the polynomials are built from.
//!
//! Invariants: `c[k]` multiplies `s^k`; the vector is never empty. The
//! leading coefficient may be zero only where the caller truncates the
//! polynomial explicitly (the synthesis knows which coefficients theory
//! cancels, and drops them rather than trusting rounding residue).

use num_complex::{Complex, Complex64};
use twofloat::TwoFloat;

/// Double-double real number (about 106 significant bits).
pub(crate) type Dd = TwoFloat;

/// The double-double value of an f64.
pub(crate) fn dd(x: f64) -> Dd {
    Dd::from(x)
}

/// A real polynomial in `s`, coefficients in ascending powers.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Poly {
    c: Vec<Dd>,
}

/// A polynomial's value at `s = jw`, as real and imaginary parts.
#[derive(Debug, Clone, Copy)]
pub(crate) struct AtJw {
    pub(crate) re: Dd,
    pub(crate) im: Dd,
}

impl AtJw {
    /// Imaginary part of `self / den`.
    pub(crate) fn im_ratio(self, den: AtJw) -> Dd {
        (self.im * den.re - self.re * den.im) / (den.re * den.re + den.im * den.im)
    }
}

impl Poly {
    /// The polynomial with these coefficients (ascending powers).
    pub(crate) fn new(c: Vec<Dd>) -> Poly {
        debug_assert!(!c.is_empty(), "a polynomial has at least one coefficient");
        Poly { c }
    }

    /// Expands `prod (s - r)` over the roots, and returns it with the
    /// largest imaginary part left in a coefficient, relative to that
    /// coefficient's scale (the same coefficient of `prod (s + |r|)`).
    /// The residue is zero (to double-double rounding) exactly when the
    /// roots come in conjugate pairs.
    pub(crate) fn from_roots(roots: &[Complex64]) -> (Poly, f64) {
        let zero = Complex::new(dd(0.0), dd(0.0));
        let mut c = vec![Complex::new(dd(1.0), dd(0.0))];
        let mut scale = vec![1.0_f64];
        for r in roots {
            let rd = Complex::new(dd(r.re), dd(r.im));
            let mut next = vec![zero; c.len() + 1];
            let mut next_scale = vec![0.0; c.len() + 1];
            for (k, ck) in c.iter().enumerate() {
                next[k + 1] += *ck;
                next[k] -= rd * *ck;
                next_scale[k + 1] += scale[k];
                next_scale[k] += r.norm() * scale[k];
            }
            c = next;
            scale = next_scale;
        }
        let residue = c
            .iter()
            .zip(&scale)
            .map(|(ck, sk)| f64::from(ck.im).abs() / sk)
            .fold(0.0, f64::max);
        (Poly::new(c.into_iter().map(|ck| ck.re).collect()), residue)
    }

    /// Degree (the index of the last stored coefficient).
    pub(crate) fn degree(&self) -> usize {
        self.c.len() - 1
    }

    /// Coefficient of `s^k` (zero beyond the degree).
    pub(crate) fn coef(&self, k: usize) -> Dd {
        self.c.get(k).copied().unwrap_or_default()
    }

    /// The leading (stored highest) coefficient.
    pub(crate) fn lead(&self) -> Dd {
        self.c[self.degree()]
    }

    /// `self + sign * other`, with `sign` +1 or -1.
    pub(crate) fn add_signed(&self, other: &Poly, sign: f64) -> Poly {
        let len = self.c.len().max(other.c.len());
        Poly::new(
            (0..len)
                .map(|k| self.coef(k) + other.coef(k) * sign)
                .collect(),
        )
    }

    /// `self - a s other`.
    pub(crate) fn sub_shifted(&self, a: Dd, other: &Poly) -> Poly {
        let len = self.c.len().max(other.c.len() + 1);
        let shifted = |k: usize| if k == 0 { dd(0.0) } else { other.coef(k - 1) };
        Poly::new((0..len).map(|k| self.coef(k) - a * shifted(k)).collect())
    }

    /// The polynomial cut to `degree`, dropping higher coefficients that
    /// the caller knows to be zero in exact arithmetic.
    pub(crate) fn truncated(mut self, degree: usize) -> Poly {
        self.c.truncate(degree + 1);
        self
    }

    /// Divides by `s^2 + w^2`: returns the quotient and the remainder
    /// `r1 s + r0` evaluated at `s = jw`, as a magnitude relative to the
    /// dividend's scale there (`sum |c_k| w^k`). The synthesis divides
    /// only where theory says the division is exact, so the relative
    /// remainder measures how far rounding kept it from being so.
    pub(crate) fn div_quadratic(&self, w: f64) -> (Poly, f64) {
        let w2 = Dd::new_mul(w, w);
        let m = self.degree();
        if m < 2 {
            return (Poly::new(vec![dd(0.0)]), 1.0);
        }
        // c_k = q_{k-2} + w^2 q_k, run from the top down.
        let mut q = vec![dd(0.0); m - 1];
        for k in (2..=m).rev() {
            let above = q.get(k).copied().unwrap_or_default();
            q[k - 2] = self.c[k] - w2 * above;
        }
        let r1 = self.c[1] - w2 * q.get(1).copied().unwrap_or_default();
        let r0 = self.c[0] - w2 * q[0];
        let remainder = f64::from(r0).hypot(f64::from(r1) * w);
        (Poly::new(q), remainder / self.scale_at(w))
    }

    /// Value at `s = jw`: the even part in `x = -w^2` gives the real part,
    /// `w` times the odd part the imaginary part.
    pub(crate) fn at_jw(&self, w: f64) -> AtJw {
        let x = -Dd::new_mul(w, w);
        let horner = |start: usize| {
            self.c
                .iter()
                .skip(start)
                .step_by(2)
                .rev()
                .fold(dd(0.0), |acc, ck| acc * x + *ck)
        };
        AtJw {
            re: horner(0),
            im: horner(1) * w,
        }
    }

    /// `sum |c_k| w^k`: the size of the terms that make up the value at
    /// `s = jw`, against which cancellation is judged.
    pub(crate) fn scale_at(&self, w: f64) -> f64 {
        self.c
            .iter()
            .rev()
            .fold(0.0, |acc, ck| acc * w + f64::from(*ck).abs())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Exact small cases worked by hand: (s + 1)(s + 2) = s^2 + 3 s + 2,
    /// and (s^2 + 4)(s + 3) + 5 s + 7 divided by s^2 + 4.
    #[test]
    fn expansion_and_division_match_hand_arithmetic() {
        let (p, residue) =
            Poly::from_roots(&[Complex64::new(-1.0, 0.0), Complex64::new(-2.0, 0.0)]);
        let got: Vec<f64> = (0..=2).map(|k| f64::from(p.coef(k))).collect();
        assert_eq!(got, vec![2.0, 3.0, 1.0]);
        assert_eq!(residue, 0.0);

        // (s^2 + 4)(s + 3) = s^3 + 3 s^2 + 4 s + 12
        let exact = Poly::new(vec![dd(12.0), dd(4.0), dd(3.0), dd(1.0)]);
        let (q, rel) = exact.div_quadratic(2.0);
        assert_eq!((f64::from(q.coef(0)), f64::from(q.coef(1))), (3.0, 1.0));
        assert_eq!(rel, 0.0);
        let with_remainder = exact.add_signed(&Poly::new(vec![dd(7.0), dd(5.0)]), 1.0);
        let (_, rel) = with_remainder.div_quadratic(2.0);
        // remainder 5 s + 7 at s = 2j: |7 + 10j| over 19 + 9*2 + 3*4 + 8
        let expected = 7.0_f64.hypot(10.0) / (19.0 + 18.0 + 12.0 + 8.0);
        assert!(
            (rel - expected).abs() < 1e-15,
            "relative remainder {rel}, expected {expected}"
        );
    }

    /// s^3 + 2 s + 1 at s = 2j is -8j + 4j + 1 = 1 - 4j.
    #[test]
    fn value_on_the_imaginary_axis() {
        let p = Poly::new(vec![dd(1.0), dd(2.0), dd(0.0), dd(1.0)]);
        let v = p.at_jw(2.0);
        assert_eq!((f64::from(v.re), f64::from(v.im)), (1.0, -4.0));
    }

    /// A root set that is not closed under conjugation leaves an
    /// imaginary residue; a conjugate pair leaves none.
    #[test]
    fn conjugate_residue() {
        let pair = [Complex64::new(-0.5, 0.8), Complex64::new(-0.5, -0.8)];
        assert_eq!(Poly::from_roots(&pair).1, 0.0);
        let lone = [Complex64::new(-0.5, 0.8)];
        assert!(Poly::from_roots(&lone).1 > 0.5);
    }
}

//! Real polynomials in `s` with double-double coefficients: the arithmetic
//! of the Darlington synthesis step.
//!
//! Why double-double: the continued-fraction and zero-shifting steps
//! subtract nearly equal coefficients, and in plain f64 a ladder loses
//! about one decimal digit per order (measured with plain f64 arithmetic:
//! 1.5e-3 relative element error at order 25 for a 0.1 dB Chebyshev; no
//! test keeps that measurement). With about 32 significant digits the
//! only error left is the f64 rounding of the roots the polynomials are
//! built from.
//!
//! Invariants: `c[k]` multiplies `s^k`; the vector is never empty. The
//! leading coefficient may be zero only where the caller truncates the
//! polynomial explicitly (the synthesis knows which coefficients theory
//! cancels, and drops them rather than trusting rounding residue).

use num_complex::{Complex, Complex64};
use twofloat::TwoFloat;

/// Double-double real number (about 106 significant bits).
pub(crate) type Dd = TwoFloat;

/// Double-double complex number.
pub(crate) type Cdd = Complex<Dd>;

/// The double-double value of an f64.
pub(crate) fn dd(x: f64) -> Dd {
    Dd::from(x)
}

/// `a / b` to double-double accuracy, by long division: a quotient digit
/// from the high words, the remainder computed exactly enough with the
/// (accurate) double-double times f64 product, twice more (the accurate
/// division of Y. Hida, X. S. Li and D. H. Bailey, "Algorithms for
/// quad-double precision floating point arithmetic", ARITH-15, 2001).
///
/// Why not `a / b`: twofloat 0.8.4 forms the correction `1 - b.hi * th`
/// of its double-double division without a fused multiply-add, so the
/// quotient is only f64-accurate (measured: its 1/3 has a zero low word);
/// the synthesis lost about one digit per order through it. Every
/// division of two double-double numbers in this module goes through here.
pub(crate) fn div(a: Dd, b: Dd) -> Dd {
    let q1 = a.hi() / b.hi();
    let r = a - b * q1;
    let q2 = r.hi() / b.hi();
    let r = r - b * q2;
    let q3 = r.hi() / b.hi();
    Dd::new_add(q1, q2) + q3
}

/// `a / b` for double-double complex numbers, through [`div`].
pub(crate) fn cdiv(a: Cdd, b: Cdd) -> Cdd {
    let den = b.re * b.re + b.im * b.im;
    Complex::new(
        div(a.re * b.re + a.im * b.im, den),
        div(a.im * b.re - a.re * b.im, den),
    )
}

/// The double-double value of a complex f64.
pub(crate) fn cdd(z: Complex64) -> Cdd {
    Complex::new(dd(z.re), dd(z.im))
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
        div(
            self.im * den.re - self.re * den.im,
            den.re * den.re + den.im * den.im,
        )
    }
}

impl Poly {
    /// The polynomial with these coefficients (ascending powers).
    pub(crate) fn new(c: Vec<Dd>) -> Poly {
        debug_assert!(!c.is_empty(), "a polynomial has at least one coefficient");
        Poly { c }
    }

    /// Expands `prod (s - r)` over the roots, and returns it with the
    /// largest imaginary part left in a coefficient, relative to the
    /// largest coefficient of `prod (s + |r|)` (a bound on every
    /// coefficient's terms). The residue is zero (to double-double
    /// rounding) exactly when the roots come in conjugate pairs; a root
    /// without its partner leaves a residue of order 1. (A per-coefficient
    /// scale would not do: a root at 1e-17 j, rounding of a root at 0,
    /// would count as unpaired.)
    pub(crate) fn from_roots(roots: &[Cdd]) -> (Poly, f64) {
        let zero = Complex::new(dd(0.0), dd(0.0));
        let mut c = vec![Complex::new(dd(1.0), dd(0.0))];
        let mut scale = vec![1.0_f64];
        for r in roots {
            let size = f64::from(r.re).hypot(f64::from(r.im));
            let mut next = vec![zero; c.len() + 1];
            let mut next_scale = vec![0.0; c.len() + 1];
            for (k, ck) in c.iter().enumerate() {
                next[k + 1] += *ck;
                next[k] -= *r * *ck;
                next_scale[k + 1] += scale[k];
                next_scale[k] += size * scale[k];
            }
            c = next;
            scale = next_scale;
        }
        let largest = scale.iter().copied().fold(0.0, f64::max);
        let residue = c
            .iter()
            .map(|ck| f64::from(ck.im).abs())
            .fold(0.0, f64::max)
            / largest;
        (Poly::new(c.into_iter().map(|ck| ck.re).collect()), residue)
    }

    /// `prod (s^2 + w^2)` over the frequencies.
    pub(crate) fn from_jw_pairs(ws: &[f64]) -> Poly {
        ws.iter().fold(Poly::new(vec![dd(1.0)]), |p, &w| {
            p.mul(&Poly::new(vec![Dd::new_mul(w, w), dd(0.0), dd(1.0)]))
        })
    }

    /// `p(-s)`.
    pub(crate) fn mirrored(&self) -> Poly {
        let sign = |k: usize| if k.is_multiple_of(2) { 1.0 } else { -1.0 };
        Poly::new(
            self.c
                .iter()
                .enumerate()
                .map(|(k, ck)| *ck * sign(k))
                .collect(),
        )
    }

    /// The product of two polynomials.
    pub(crate) fn mul(&self, other: &Poly) -> Poly {
        let mut c = vec![dd(0.0); self.c.len() + other.c.len() - 1];
        for (i, a) in self.c.iter().enumerate() {
            for (j, b) in other.c.iter().enumerate() {
                c[i + j] += *a * *b;
            }
        }
        Poly::new(c)
    }

    /// `k p(s)`.
    pub(crate) fn scaled(&self, k: Dd) -> Poly {
        Poly::new(self.c.iter().map(|ck| *ck * k).collect())
    }

    /// Value and derivative at a complex point (Horner, both at once).
    pub(crate) fn value_and_slope(&self, z: Cdd) -> (Cdd, Cdd) {
        let zero = Complex::new(dd(0.0), dd(0.0));
        self.c.iter().rev().fold((zero, zero), |(v, d), ck| {
            (v * z + Complex::new(*ck, dd(0.0)), d * z + v)
        })
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
        let (p, residue) = Poly::from_roots(&[
            cdd(Complex64::new(-1.0, 0.0)),
            cdd(Complex64::new(-2.0, 0.0)),
        ]);
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

    /// s^3 + 2 s + 1 at s = 2j is -8j + 4j + 1 = 1 - 4j; its derivative
    /// 3 s^2 + 2 is -10 there; p(-s) = -s^3 - 2 s + 1; (s^2 + 4)(s^2 + 1)
    /// = s^4 + 5 s^2 + 4 (hand arithmetic).
    #[test]
    fn values_products_and_mirror() {
        let p = Poly::new(vec![dd(1.0), dd(2.0), dd(0.0), dd(1.0)]);
        let v = p.at_jw(2.0);
        assert_eq!((f64::from(v.re), f64::from(v.im)), (1.0, -4.0));
        let (v, d) = p.value_and_slope(cdd(Complex64::new(0.0, 2.0)));
        assert_eq!(
            (
                f64::from(v.re),
                f64::from(v.im),
                f64::from(d.re),
                f64::from(d.im)
            ),
            (1.0, -4.0, -10.0, 0.0)
        );
        let m: Vec<f64> = (0..=3).map(|k| f64::from(p.mirrored().coef(k))).collect();
        assert_eq!(m, vec![1.0, -2.0, 0.0, -1.0]);
        let q: Vec<f64> = (0..=4)
            .map(|k| f64::from(Poly::from_jw_pairs(&[2.0, 1.0]).coef(k)))
            .collect();
        assert_eq!(q, vec![4.0, 0.0, 5.0, 0.0, 1.0]);
    }

    /// 1/3 and 2/7 to double-double accuracy: the residual of
    /// q * b - a is below 1e-31 (double-double unit roundoff is 1.1e-32).
    #[test]
    fn division_is_double_double_accurate() {
        for (a, b) in [(1.0, 3.0), (2.0, 7.0), (-5.0, 0.1)] {
            let q = div(dd(a), dd(b));
            let residual = f64::from(q * b - dd(a)).abs() / a.abs();
            assert!(residual < 1e-31, "{a}/{b}: residual {residual:e}");
            // twofloat's double-double by f64 division is accurate as is
            let residual = f64::from((dd(a) / b) * b - dd(a)).abs() / a.abs();
            assert!(residual < 1e-31, "{a}/{b} by f64: residual {residual:e}");
        }
        let z = cdiv(
            cdd(Complex64::new(1.0, 2.0)),
            cdd(Complex64::new(3.0, -1.0)),
        );
        // (1 + 2j)/(3 - j) = (1 + 2j)(3 + j)/10 = (1 + 7j)/10
        let back = z * cdd(Complex64::new(3.0, -1.0));
        assert!(
            f64::from(back.re - dd(1.0)).abs() < 1e-31
                && f64::from(back.im - dd(2.0)).abs() < 1e-31
        );
    }

    /// A root set that is not closed under conjugation leaves an
    /// imaginary residue; a conjugate pair leaves none.
    #[test]
    fn conjugate_residue() {
        let pair = [
            cdd(Complex64::new(-0.5, 0.8)),
            cdd(Complex64::new(-0.5, -0.8)),
        ];
        assert_eq!(Poly::from_roots(&pair).1, 0.0);
        let lone = [cdd(Complex64::new(-0.5, 0.8))];
        assert!(Poly::from_roots(&lone).1 > 0.5);
    }
}

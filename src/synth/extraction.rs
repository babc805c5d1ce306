//! Element extraction from the input immittance of a doubly terminated
//! lowpass ladder: zero shifting for the finite transmission zeros, then
//! the continued fraction about infinity (Cauer's first form) for the
//! zeros at infinity.
//!
//! Form-independent terms: the immittance `X = num/den` always has a pole
//! at infinity. The first arm removes part (or all) of it; its element is
//! of the *primary* kind (inductor when `X` is an impedance, capacitor
//! when it is an admittance), the next arm works on `1/X` with the *dual*
//! kind, and so on. Arms at even indices are primary, at odd indices dual;
//! every resonator sits at an odd index.
//!
//! Invariants: on entry to each step `deg num = deg den + 1`; every
//! coefficient that theory cancels is dropped explicitly after checking
//! that rounding left it negligible; every element is checked positive as
//! soon as it is computed.

use super::poly::{dd, Dd, Poly};
use super::SynthError;

/// Largest relative size accepted for a coefficient that the ladder
/// structure makes zero, and for the remainder of a division by
/// `s^2 + w^2` that zero shifting makes exact. The inputs are f64 roots,
/// consistent to about 1e-16 relative; the worst residues measured over
/// the test matrix (orders to 25 all-pole, 15 elliptic) stay below 1e-12.
/// A residue of 1e-9 perturbs the immittance, hence the response, by
/// about 1e-8 dB, inside the 0.001 dB budget, while an immittance that
/// is not this ladder's leaves residues of order 1.
pub(crate) const STRUCTURE_TOLERANCE: f64 = 1e-9;

/// One arm, in form-independent terms (see the module doc).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) enum Section {
    /// A single element of the arm's kind (primary at even indices).
    Single(f64),
    /// A resonator at a transmission zero: an element of the primary kind
    /// and one of the dual kind, resonating at the zero.
    Resonator {
        /// Value of the primary-kind element.
        primary: f64,
        /// Value of the dual-kind element.
        dual: f64,
    },
}

/// The immittance `num/den`, with a pole at infinity.
struct Immittance {
    num: Poly,
    den: Poly,
}

/// The arms of the ladder and the load it ends in, in primary terms (the
/// load as an immittance of the same kind as the input immittance: an
/// impedance when the first arm is series).
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Extracted {
    pub(crate) sections: Vec<Section>,
    pub(crate) primary_load: f64,
}

/// Extracts the ladder of `num/den`, removing the finite transmission
/// zeros (rad/s) in the order given, then the zeros at infinity.
pub(crate) fn extract(num: Poly, den: Poly, zeros: &[f64]) -> Result<Extracted, SynthError> {
    let mut sections = Vec::new();
    let mut x = Immittance { num, den };
    for &w in zeros {
        x = remove_zero(x, w, &mut sections)?;
    }
    let remainder = cauer_tail(x, &mut sections)?;
    // The remainder is an immittance of the last arm's kind.
    let last_is_primary = (sections.len() - 1) % 2 == 0;
    let primary_load = if last_is_primary {
        remainder
    } else {
        1.0 / remainder
    };
    Ok(Extracted {
        sections,
        primary_load,
    })
}

/// One zero-shifting step at `w`: partial removal of the pole at infinity
/// so that the rest vanishes at `jw`, then full removal of the resonator
/// that the inverse has there. Appends two arms.
fn remove_zero(
    x: Immittance,
    w: f64,
    sections: &mut Vec<Section>,
) -> Result<Immittance, SynthError> {
    let arm = sections.len();
    // At a transmission zero the load is cut off, so X(jw) is a pure
    // reactance j w a; removing s a leaves a zero at jw.
    let a: Dd = x.num.at_jw(w).im_ratio(x.den.at_jw(w)) / w;
    positive(f64::from(a), arm)?;
    let q = exact_quotient(&x.num.sub_shifted(a, &x.den), w, arm)?;
    // 1/(X - s a) = den / ((s^2 + w^2) q) has the pole pair k s / (s^2 + w^2)
    // with k = den(jw) / (jw q(jw)), which is real: Im(den/q)(jw) / w.
    let k: Dd = x.den.at_jw(w).im_ratio(q.at_jw(w)) / w;
    positive(f64::from(k), arm + 1)?;
    let rest = exact_quotient(&x.den.sub_shifted(k, &q), w, arm + 1)?;
    // The branch k s / (s^2 + w^2) is 1/k of the primary kind in series
    // (or parallel) with k / w^2 of the dual kind.
    let w2 = Dd::new_mul(w, w);
    sections.push(Section::Single(f64::from(a)));
    sections.push(Section::Resonator {
        primary: f64::from(dd(1.0) / k),
        dual: f64::from(k / w2),
    });
    Ok(Immittance { num: q, den: rest })
}

/// `p / (s^2 + w^2)`, checking that the division is exact to rounding.
fn exact_quotient(p: &Poly, w: f64, arm: usize) -> Result<Poly, SynthError> {
    let (q, residue) = p.div_quadratic(w);
    if residue <= STRUCTURE_TOLERANCE {
        Ok(q)
    } else {
        Err(SynthError::ZeroNotRemoved {
            arm,
            w,
            residue,
            tolerance: STRUCTURE_TOLERANCE,
        })
    }
}

/// The continued fraction about infinity: full removal of the pole at
/// infinity, inversion, and again, until a constant is left. Returns that
/// constant, an immittance of the last arm's kind.
fn cauer_tail(mut x: Immittance, sections: &mut Vec<Section>) -> Result<f64, SynthError> {
    loop {
        let arm = sections.len();
        let m = x.den.degree();
        let a = x.num.lead() / x.den.lead();
        positive(f64::from(a), arm)?;
        sections.push(Section::Single(f64::from(a)));
        if m == 0 {
            return Ok(f64::from(x.num.coef(0) / x.den.coef(0)));
        }
        // The choice of `a` cancels s^(m+1); the ladder structure cancels
        // s^m too, since the inverse of the rest must again have a pole at
        // infinity.
        let rest = x.num.sub_shifted(a, &x.den);
        let terms = f64::from(x.num.coef(m)).abs() + f64::from(a * x.den.coef(m - 1)).abs();
        let residue = f64::from(rest.coef(m)).abs() / terms;
        if residue > STRUCTURE_TOLERANCE {
            return Err(SynthError::StructureResidue {
                arm,
                residue,
                tolerance: STRUCTURE_TOLERANCE,
            });
        }
        x = Immittance {
            num: x.den,
            den: rest.truncated(m - 1),
        };
    }
}

/// The value if it is a positive finite number.
fn positive(value: f64, arm: usize) -> Result<(), SynthError> {
    if value > 0.0 && value.is_finite() {
        Ok(())
    } else {
        Err(SynthError::NegativeElement { arm, value })
    }
}

/// Most orders of zero removal tried before giving up: 7! = 5040 covers
/// every order exhaustively up to seven zero pairs (elliptic order 15,
/// or 16 in a modified even form), at a few microseconds each.
pub(crate) const MAX_ZERO_ORDERS: usize = 5040;

/// The usual order of zero removal: the zero nearest the passband in the
/// middle of the ladder, the others placed alternately after and before it
/// in ascending order, so the highest zeros sit at the ends.
pub(crate) fn usual_order(zeros: &[f64]) -> Vec<f64> {
    let mut ascending = zeros.to_vec();
    ascending.sort_by(f64::total_cmp);
    middle_out(&ascending)
}

/// Every other order, as permutations of `usual` in lexicographic order of
/// positions, so that [`MAX_ZERO_ORDERS`] orders are tried in all at most.
pub(crate) fn other_orders(usual: &[f64]) -> impl Iterator<Item = Vec<f64>> + '_ {
    let mut index: Vec<usize> = (0..usual.len()).collect();
    std::iter::from_fn(move || {
        next_permutation(&mut index).then(|| index.iter().map(|&i| usual[i]).collect())
    })
    .take(MAX_ZERO_ORDERS - 1)
}

/// Places ascending values alternately behind and in front of the first.
fn middle_out(ascending: &[f64]) -> Vec<f64> {
    let mut placed = std::collections::VecDeque::with_capacity(ascending.len());
    for (i, &w) in ascending.iter().enumerate() {
        if i % 2 == 1 {
            placed.push_back(w);
        } else {
            placed.push_front(w);
        }
    }
    placed.into()
}

/// Advances to the next permutation in lexicographic order; false after
/// the last (the standard successor algorithm).
fn next_permutation(v: &mut [usize]) -> bool {
    let Some(i) = (1..v.len()).rev().find(|&i| v[i - 1] < v[i]) else {
        return false;
    };
    let j = (i..v.len()).rev().find(|&j| v[j] > v[i - 1]).unwrap_or(i);
    v.swap(i - 1, j);
    v[i..].reverse();
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Lowest zero in the middle, highest at the ends; the other 3! - 1
    /// orders follow, each once.
    #[test]
    fn usual_order_then_all_permutations() {
        assert_eq!(
            middle_out(&[1.0, 2.0, 3.0, 4.0, 5.0]),
            vec![5.0, 3.0, 1.0, 2.0, 4.0]
        );
        let usual = usual_order(&[3.0, 1.0, 2.0]);
        assert_eq!(usual, vec![3.0, 1.0, 2.0]);
        let mut all: Vec<Vec<f64>> = other_orders(&usual).collect();
        all.push(usual);
        all.sort_by(|a, b| a.partial_cmp(b).unwrap());
        all.dedup();
        assert_eq!(all.len(), 6);
        assert_eq!(other_orders(&[]).count(), 0);
    }

    /// Z = s + 1/(2 s + 1/3) = (6 s^2 + s + 3) / (6 s + 1): a series 1 H,
    /// a shunt 2 F and a 3 ohm load, worked by hand.
    #[test]
    fn continued_fraction_of_a_known_ladder() {
        let num = Poly::new(vec![dd(3.0), dd(1.0), dd(6.0)]);
        let den = Poly::new(vec![dd(1.0), dd(6.0)]);
        let got = extract(num, den, &[]).unwrap();
        assert_eq!(
            got.sections,
            vec![Section::Single(1.0), Section::Single(2.0)]
        );
        assert!((got.primary_load - 3.0).abs() < 1e-15);
    }

    /// A series 1 H, a shunt branch 1 H + 1 F (resonating at 1 rad/s), a
    /// series 1 H and a 1 ohm load, worked by hand:
    /// Z = s + 1 / (s / (s^2 + 1) + 1 / (s + 1)); the inner admittance is
    /// (2 s^2 + s + 1) / ((s^2 + 1)(s + 1)), so
    /// Z = s + (s^3 + s^2 + s + 1) / (2 s^2 + s + 1)
    ///   = (3 s^3 + 2 s^2 + 2 s + 1) / (2 s^2 + s + 1).
    #[test]
    fn zero_shifting_of_a_known_ladder() {
        let num = Poly::new(vec![dd(1.0), dd(2.0), dd(2.0), dd(3.0)]);
        let den = Poly::new(vec![dd(1.0), dd(1.0), dd(2.0)]);
        let got = extract(num, den, &[1.0]).unwrap();
        let close = |a: f64, b: f64| (a - b).abs() < 1e-14;
        assert_eq!(got.sections.len(), 3);
        let Section::Single(l1) = got.sections[0] else {
            panic!("arm 0 is {:?}", got.sections[0])
        };
        let Section::Resonator { primary, dual } = got.sections[1] else {
            panic!("arm 1 is {:?}", got.sections[1])
        };
        let Section::Single(l3) = got.sections[2] else {
            panic!("arm 2 is {:?}", got.sections[2])
        };
        assert!(
            close(l1, 1.0) && close(primary, 1.0) && close(dual, 1.0) && close(l3, 1.0),
            "{:?}",
            got.sections
        );
        assert!(close(got.primary_load, 1.0));
    }
}

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

use super::poly::{dd, div, Dd, Poly};
use super::SynthError;

/// Largest relative size accepted for a coefficient that the ladder
/// structure makes zero, and for the remainder of a division by
/// `s^2 + w^2` that zero shifting makes exact. With the poles polished to
/// double-double consistency the residues start near 1e-32 and grow by one
/// to two decades per arm (measured; the continued fraction amplifies the
/// rounding of each step in the next); extraction from both ends keeps
/// them below about 1e-14 at order 25. A residue of 1e-9 perturbs the
/// immittance, hence the response, by about 1e-8 dB, inside the 0.001 dB
/// budget, while an immittance that is not this ladder's leaves residues
/// of order 1.
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

/// Extracts the first `arms` arms of the ladder of `num/den`, removing the
/// finite transmission zeros (rad/s) in the order given, then the zeros at
/// infinity. `arms` must not exceed the ladder's (the order); the
/// extraction stops early there otherwise.
pub(crate) fn extract(
    num: Poly,
    den: Poly,
    zeros: &[f64],
    arms: usize,
) -> Result<Vec<Section>, SynthError> {
    let mut sections = Vec::with_capacity(arms);
    let mut x = Immittance { num, den };
    for &w in zeros {
        match remove_zero(x, w, &mut sections, arms)? {
            Some(rest) => x = rest,
            None => return Ok(sections),
        }
    }
    cauer_tail(x, &mut sections, arms)?;
    Ok(sections)
}

/// One zero-shifting step at `w`: partial removal of the pole at infinity
/// so that the rest vanishes at `jw`, then full removal of the resonator
/// that the inverse has there. Appends up to two arms; `None` once `arms`
/// arms are out.
fn remove_zero(
    x: Immittance,
    w: f64,
    sections: &mut Vec<Section>,
    arms: usize,
) -> Result<Option<Immittance>, SynthError> {
    if sections.len() >= arms {
        return Ok(None);
    }
    let arm = sections.len();
    // At a transmission zero the load is cut off, so X(jw) is a pure
    // reactance j w a; removing s a leaves a zero at jw.
    let a: Dd = x.num.at_jw(w).im_ratio(x.den.at_jw(w)) / w;
    positive(f64::from(a), arm)?;
    sections.push(Section::Single(f64::from(a)));
    if sections.len() >= arms {
        return Ok(None);
    }
    let q = exact_quotient(&x.num.sub_shifted(a, &x.den), w, arm)?;
    // 1/(X - s a) = den / ((s^2 + w^2) q) has the pole pair k s / (s^2 + w^2)
    // with k = den(jw) / (jw q(jw)), which is real: Im(den/q)(jw) / w.
    let k: Dd = x.den.at_jw(w).im_ratio(q.at_jw(w)) / w;
    positive(f64::from(k), arm + 1)?;
    let rest = exact_quotient(&x.den.sub_shifted(k, &q), w, arm + 1)?;
    // The branch k s / (s^2 + w^2) is 1/k of the primary kind in series
    // (or parallel) with k / w^2 of the dual kind.
    sections.push(Section::Resonator {
        primary: f64::from(div(dd(1.0), k)),
        dual: f64::from(div(k, Dd::new_mul(w, w))),
    });
    Ok(Some(Immittance { num: q, den: rest }))
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
/// infinity, inversion, and again, until `arms` arms are out or only the
/// termination is left.
fn cauer_tail(
    mut x: Immittance,
    sections: &mut Vec<Section>,
    arms: usize,
) -> Result<(), SynthError> {
    while sections.len() < arms {
        let arm = sections.len();
        let m = x.den.degree();
        let a = div(x.num.lead(), x.den.lead());
        positive(f64::from(a), arm)?;
        sections.push(Section::Single(f64::from(a)));
        if m == 0 || sections.len() == arms {
            break;
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
    Ok(())
}

/// Accepts a positive finite element value.
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
    /// a shunt 2 F and a 3 ohm load, worked by hand. Asking for one arm
    /// stops after the first.
    #[test]
    fn continued_fraction_of_a_known_ladder() {
        let num = Poly::new(vec![dd(3.0), dd(1.0), dd(6.0)]);
        let den = Poly::new(vec![dd(1.0), dd(6.0)]);
        let got = extract(num.clone(), den.clone(), &[], 2).unwrap();
        assert_eq!(got, vec![Section::Single(1.0), Section::Single(2.0)]);
        assert_eq!(
            extract(num, den, &[], 1).unwrap(),
            vec![Section::Single(1.0)]
        );
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
        let got = extract(num, den, &[1.0], 3).unwrap();
        let expected = [
            Section::Single(1.0),
            Section::Resonator {
                primary: 1.0,
                dual: 1.0,
            },
            Section::Single(1.0),
        ];
        assert_eq!(got.len(), 3);
        for (g, e) in got.iter().zip(&expected) {
            let close = match (g, e) {
                (Section::Single(a), Section::Single(b)) => (a - b).abs() < 1e-14,
                (
                    Section::Resonator {
                        primary: p,
                        dual: d,
                    },
                    Section::Resonator {
                        primary: q,
                        dual: c,
                    },
                ) => (p - q).abs() < 1e-14 && (d - c).abs() < 1e-14,
                _ => false,
            };
            assert!(close, "got {got:?}, expected {expected:?}");
        }
    }
}

//! Element extraction from the input immittance of a doubly terminated
//! lowpass ladder: zero shifting for the finite transmission zeros, then
//! the continued fraction about infinity (Cauer's first form) for the
//! zeros at infinity.
//!
//! Form-independent terms: the immittance `X = num/den` always has a pole
//! at infinity. The first arm removes part (or all) of it; its element is
//! of the *primary* kind (inductor when `X` is an impedance, capacitor
//! when it is an admittance), the next arm works on `1/X` with the *dual*
//! kind, and so on: arms at even indices are primary, at odd indices dual.
//! A resonator takes the index after the partial removal that prepares
//! its zero.
//!
//! Accuracy: every coefficient that theory cancels (the s^m coefficient in
//! the continued fraction, the remainder of each division by s^2 + w^2) is
//! dropped explicitly, and its size relative to the terms that made it is
//! the rounding residue of that step. Residues grow by up to two decades
//! per arm (measured), faster when the reflection zeros lie in the left
//! half plane than when they lie in the right one, so the extraction
//! stops, without error, at the first residue above [`ACCURACY_LIMIT`]:
//! every arm it returns was computed from remainders that were accurate.
//! The caller joins such partial extractions from both ends.
//!
//! Invariants: on entry to each step `deg num = deg den + 1`; every
//! element is checked positive as soon as it is computed (an accurate
//! non-positive value means this order of zero removal gives no ladder).

use super::poly::{dd, div, Dd, Poly};
use super::SynthError;

/// Largest rounding residue (relative, see the module doc) of the
/// remainders an arm may be computed from. A residue is a relative
/// perturbation of a remainder, so 1e-9 bounds the perturbation of the
/// immittance an element is read from far inside what the 0.001 dB budget
/// allows (about 1e-5). The residue overstates the element error: over the
/// all-pole test matrix the junction arms were read from remainders with
/// residues up to 3.5e-11, yet both ends agreed to 2.3e-14 and the elements
/// matched closed forms to 3.6e-14.
pub(crate) const ACCURACY_LIMIT: f64 = 1e-9;

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

/// The arms extracted from one end while the remainders stayed accurate.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Extraction {
    /// The arms, from this end.
    pub(crate) sections: Vec<Section>,
    /// For each arm, the largest residue of the remainders it was computed
    /// from (0 for the first): an estimate of its relative error.
    pub(crate) residues: Vec<f64>,
    /// Largest residue met so far, including the one that stopped it.
    worst: f64,
}

impl Extraction {
    fn push(&mut self, section: Section) {
        self.sections.push(section);
        self.residues.push(self.worst);
    }

    /// Records a remainder's residue; false once past the limit.
    fn accept(&mut self, residue: f64) -> bool {
        self.worst = self.worst.max(residue);
        self.worst <= ACCURACY_LIMIT
    }
}

/// The immittance `num/den`, with a pole at infinity.
struct Immittance {
    num: Poly,
    den: Poly,
}

/// Extracts the ladder of `num/den` as far as the remainders stay
/// accurate (possibly to the end): first `leading_full` full removals of
/// the pole at infinity, then the finite transmission zeros (rad/s) in the
/// order given, each by zero shifting, then full removals to the end.
///
/// The layout this reads (or builds): seen from the source, a zero section
/// for each finite zero and the remaining zeros at infinity at the load
/// end; seen from the load, those arms come first, but the last of them
/// is the partial removal that starts the first zero section, so
/// `leading_full` is one less than the number of zeros at infinity there.
pub(crate) fn extract(
    num: Poly,
    den: Poly,
    zeros: &[f64],
    leading_full: usize,
) -> Result<Extraction, SynthError> {
    let mut out = Extraction {
        sections: Vec::new(),
        residues: Vec::new(),
        worst: 0.0,
    };
    let mut x = Some(Immittance { num, den });
    for _ in 0..leading_full {
        x = match x {
            Some(y) => full_step(y, &mut out)?,
            None => return Ok(out),
        };
    }
    for &w in zeros {
        x = match x {
            Some(y) => remove_zero(y, w, &mut out)?,
            None => return Ok(out),
        };
    }
    while let Some(y) = x {
        x = full_step(y, &mut out)?;
    }
    Ok(out)
}

/// One zero-shifting step at `w`: partial removal of the pole at infinity
/// so that the rest vanishes at `jw`, then full removal of the resonator
/// that the inverse has there. Appends up to two arms; `None` when a
/// remainder is no longer accurate.
fn remove_zero(
    x: Immittance,
    w: f64,
    out: &mut Extraction,
) -> Result<Option<Immittance>, SynthError> {
    let arm = out.sections.len();
    // At a transmission zero the load is cut off, so X(jw) is a pure
    // reactance j w a; removing s a leaves a zero at jw.
    let a: Dd = x.num.at_jw(w).im_ratio(x.den.at_jw(w)) / w;
    positive(f64::from(a), arm)?;
    out.push(Section::Single(f64::from(a)));
    let (q, residue) = x.num.sub_shifted(a, &x.den).div_quadratic(w);
    if !out.accept(residue) {
        return Ok(None);
    }
    // 1/(X - s a) = den / ((s^2 + w^2) q) has the pole pair k s / (s^2 + w^2)
    // with k = den(jw) / (jw q(jw)), which is real: Im(den/q)(jw) / w.
    let k: Dd = x.den.at_jw(w).im_ratio(q.at_jw(w)) / w;
    positive(f64::from(k), arm + 1)?;
    // The branch k s / (s^2 + w^2) is 1/k of the primary kind in series
    // (or parallel) with k / w^2 of the dual kind.
    out.push(Section::Resonator {
        primary: f64::from(div(dd(1.0), k)),
        dual: f64::from(div(k, Dd::new_mul(w, w))),
    });
    let (rest, residue) = x.den.sub_shifted(k, &q).div_quadratic(w);
    Ok(out
        .accept(residue)
        .then_some(Immittance { num: q, den: rest }))
}

/// One step of the continued fraction about infinity: full removal of
/// the pole at infinity, and the inverse of the rest; `None` when only the
/// termination is left or the rest is no longer accurate.
fn full_step(x: Immittance, out: &mut Extraction) -> Result<Option<Immittance>, SynthError> {
    let m = x.den.degree();
    let a = div(x.num.lead(), x.den.lead());
    positive(f64::from(a), out.sections.len())?;
    out.push(Section::Single(f64::from(a)));
    if m == 0 {
        return Ok(None);
    }
    // The choice of `a` cancels s^(m+1); the ladder structure cancels s^m
    // too, since the inverse of the rest must again have a pole at infinity.
    let rest = x.num.sub_shifted(a, &x.den);
    let terms = f64::from(x.num.coef(m)).abs() + f64::from(a * x.den.coef(m - 1)).abs();
    let accurate = out.accept(f64::from(rest.coef(m)).abs() / terms);
    Ok(accurate.then(|| Immittance {
        num: x.den,
        den: rest.truncated(m - 1),
    }))
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
    /// a shunt 2 F and a 3 ohm load, worked by hand; exact arithmetic
    /// leaves no residue.
    #[test]
    fn continued_fraction_of_a_known_ladder() {
        let num = Poly::new(vec![dd(3.0), dd(1.0), dd(6.0)]);
        let den = Poly::new(vec![dd(1.0), dd(6.0)]);
        let got = extract(num, den, &[], 0).unwrap();
        assert_eq!(
            got.sections,
            vec![Section::Single(1.0), Section::Single(2.0)]
        );
        assert_eq!(got.residues, vec![0.0, 0.0]);
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
        let got = extract(num, den, &[1.0], 0).unwrap().sections;
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

//! Tests of synth: ladders against closed-form element values, printed
//! table values, and the response of the approximation they realize.
//!
//! The all-pole roots are built here from their textbook closed forms,
//! independently of the approx stage, so these checks test the synthesis
//! alone.

use nocoil::approx::{Family, Params, Prototype, Variant};
use nocoil::synth::{
    synthesize, synthesize_characteristic, Arm, Characteristic, Element, Form, Ladder, Reactance,
    SynthError,
};
use num_complex::Complex64;
use std::f64::consts::{LN_10, PI};

const FORMS: [Form; 2] = [Form::MinCapacitor, Form::MinInductor];

/// Ripple factor eps = sqrt(10^(Ap/10) - 1) (common practice).
fn eps_of(ap_db: f64) -> f64 {
    (ap_db * LN_10 / 10.0).exp_m1().sqrt()
}

/// Largest relative element error accepted against the closed forms.
/// The roots are f64 (1e-16 relative) and so are the closed forms; the
/// measured worst case over n <= 25 is 1.1e-14 (printed by the tests).
/// 1e-12 leaves two decades of margin, while synthesis in plain f64
/// (measured 1.5e-3 at n = 25, see src/synth/poly.rs) fails it by nine
/// decades.
const ELEMENT_TOLERANCE: f64 = 1e-12;

/// The project's response budget for the synthesis stage, dB: a tenth of
/// the 0.01 dB end-to-end budget (tests/design.rs).
const RESPONSE_TOLERANCE_DB: f64 = 1e-3;

/// Responses below this (relative to the passband maximum) are not
/// compared: the f64 nodal solve loses relative accuracy deep in the
/// stopband, and nothing of design interest lives there.
const RESPONSE_FLOOR_DB: f64 = -100.0;

/// An all-pole approximation from its closed-form roots.
#[derive(Debug, Clone, Copy)]
enum AllPole {
    /// |H|^2 = 1 / (1 + eps^2 w^(2n)).
    Butterworth { n: usize, eps: f64 },
    /// |H|^2 = 1 / (1 + eps^2 T_n(w)^2).
    Chebyshev { n: usize, eps: f64 },
}

impl AllPole {
    fn order(self) -> usize {
        match self {
            AllPole::Butterworth { n, .. } | AllPole::Chebyshev { n, .. } => n,
        }
    }

    fn eps(self) -> f64 {
        match self {
            AllPole::Butterworth { eps, .. } | AllPole::Chebyshev { eps, .. } => eps,
        }
    }

    /// eps^2 R(0)^2: T_n(0)^2 = 1 for even n, 0 for odd; w^(2n) is 0 at DC.
    fn dc_reflection(self) -> f64 {
        match self {
            AllPole::Chebyshev { n, eps } if n % 2 == 0 => eps * eps,
            _ => 0.0,
        }
    }

    /// The n left-half-plane roots of eps^2 R(-js)^2 + level = 0 (level in
    /// (0, 1]; level 1 gives the poles), or the n zeros of R on the jw axis
    /// for level 0.
    fn roots(self, level: f64) -> Vec<Complex64> {
        match self {
            AllPole::Butterworth { n, eps } => butterworth_roots(n, eps, level),
            AllPole::Chebyshev { n, eps } => chebyshev_roots(n, eps, level),
        }
    }

    /// The flat-loss level 1 - K_t, K_t = 4r / ((1 + r)^2 |H(0)|^2), in the
    /// plain form of its definition (the DC transducer gain of the
    /// terminations over |H(0)|^2; common practice).
    fn level(self, r: f64) -> f64 {
        let h0_sq = 1.0 / (1.0 + self.dc_reflection());
        let level = 1.0 - 4.0 * r / ((1.0 + r).powi(2) * h0_sq);
        // rounding of r = coth^2(beta/4) etc. leaves about 1e-16
        if level.abs() < 1e-12 {
            0.0
        } else {
            level
        }
    }

    fn characteristic(self, r: f64) -> Characteristic {
        Characteristic {
            poles: self.roots(1.0),
            reflection_zeros: self.roots(self.level(r)),
            transmission_zeros: Vec::new(),
            dc_gain: 1.0 / (1.0 + self.dc_reflection()).sqrt(),
        }
    }

    /// H(s) = |H(0)| prod(-p) / prod(s - p).
    fn h(self, s: Complex64) -> Complex64 {
        let dc = 1.0 / (1.0 + self.dc_reflection()).sqrt();
        self.roots(1.0)
            .iter()
            .map(|p| -p / (s - p))
            .product::<Complex64>()
            * dc
    }
}

/// Roots of eps^2 (-s^2)^n + level = 0: radius (level / eps^2)^(1/2n),
/// angles pi (2k + n - 1) / (2n), k = 1..n (solve s^(2n) = (-1)^(n+1)
/// level / eps^2 and keep Re s < 0; common practice).
fn butterworth_roots(n: usize, eps: f64, level: f64) -> Vec<Complex64> {
    let radius = (level / (eps * eps)).powf(0.5 / n as f64);
    (1..=n)
        .map(|k| Complex64::from_polar(radius, PI * (2 * k + n - 1) as f64 / (2 * n) as f64))
        .collect()
}

/// Chebyshev: with eps' = eps / sqrt(level) and a = asinh(1/eps') / n, the
/// roots -sinh(a) sin(t_k) + j cosh(a) cos(t_k), t_k = (2k - 1) pi / (2n)
/// (the classical pole formula, e.g. M. E. Van Valkenburg, "Analog Filter
/// Design", 1982, ch. 8, from memory; level 0 gives the zeros j cos t_k).
fn chebyshev_roots(n: usize, eps: f64, level: f64) -> Vec<Complex64> {
    let a = (level.sqrt() / eps).asinh() / n as f64;
    (1..=n)
        .map(|k| {
            let t = (2 * k - 1) as f64 * PI / (2 * n) as f64;
            Complex64::new(-a.sinh() * t.sin(), a.cosh() * t.cos())
        })
        .collect()
}

/// The element values from source to load.
pub(crate) fn values(ladder: &Ladder) -> Vec<f64> {
    ladder.elements.iter().map(|e| e.value).collect()
}

/// Largest relative difference, printing both lists when over `tol`.
fn max_rel_error(what: &str, got: &[f64], expected: &[f64], tol: f64) -> f64 {
    assert_eq!(
        got.len(),
        expected.len(),
        "{what}: got {got:?}, expected {expected:?}"
    );
    let worst = got
        .iter()
        .zip(expected)
        .map(|(g, e)| ((g - e) / e).abs())
        .fold(0.0, f64::max);
    assert!(
        worst <= tol,
        "{what}: relative error {worst:e} > {tol:e}\n  got      {got:?}\n  expected {expected:?}"
    );
    worst
}

/// Butterworth elements for equal terminations, g_k = 2 sin((2k-1) pi / 2n)
/// at eps = 1 (closed form, common practice).
fn butterworth_g(n: usize) -> Vec<f64> {
    (1..=n)
        .map(|k| 2.0 * ((2 * k - 1) as f64 * PI / (2 * n) as f64).sin())
        .collect()
}

/// Chebyshev elements and load by the recursion of G. L. Matthaei, L. Young
/// and E. M. T. Jones, "Microwave Filters, Impedance-Matching Networks, and
/// Coupling Structures", 1964, section 4.05 (from memory):
/// beta = ln coth(Ap / 17.37) (17.37 = 40 / ln 10), gamma = sinh(beta / 2n),
/// a_k = sin((2k-1) pi / 2n), b_k = gamma^2 + sin^2(k pi / n),
/// g_1 = 2 a_1 / gamma, g_k = 4 a_(k-1) a_k / (b_(k-1) g_(k-1)),
/// g_(n+1) = 1 for odd n and coth^2(beta / 4) for even n.
fn chebyshev_myj(n: usize, ap_db: f64) -> (Vec<f64>, f64) {
    let beta = (1.0 / (ap_db * LN_10 / 40.0).tanh()).ln();
    let gamma = (beta / (2 * n) as f64).sinh();
    let a = |k: usize| ((2 * k - 1) as f64 * PI / (2 * n) as f64).sin();
    let b = |k: usize| gamma * gamma + (k as f64 * PI / n as f64).sin().powi(2);
    let mut g = vec![2.0 * a(1) / gamma];
    for k in 2..=n {
        g.push(4.0 * a(k - 1) * a(k) / (b(k - 1) * g[k - 2]));
    }
    let load = if n % 2 == 1 {
        1.0
    } else {
        (1.0 / (beta / 4.0).tanh()).powi(2)
    };
    (g, load)
}

/// The ladder must start as its form says and alternate series and shunt
/// arms; a series arm holds an inductor or a parallel tank (L, C), a shunt
/// arm a capacitor or a series resonator (L to an inner node, C to
/// ground); there are `resonators` tanks or resonators; all values are
/// positive.
fn assert_structure(ladder: &Ladder, form: Form, resonators: usize) {
    assert_eq!(ladder.form, form);
    let arms = ladder
        .elements
        .iter()
        .map(|e| e.arm_index + 1)
        .max()
        .unwrap_or(0);
    let mut found = 0;
    for i in 0..arms {
        let arm: Vec<&Element> = ladder
            .elements
            .iter()
            .filter(|e| e.arm_index == i)
            .collect();
        let series = (i % 2 == 0) == (form == Form::MinCapacitor);
        let (side, single) = if series {
            (Arm::Series, Reactance::Inductor)
        } else {
            (Arm::Shunt, Reactance::Capacitor)
        };
        assert!(
            arm.iter().all(|e| e.arm == side && e.value > 0.0),
            "arm {i} of {ladder:?}"
        );
        let kinds: Vec<Reactance> = arm.iter().map(|e| e.kind).collect();
        match kinds[..] {
            [k] => assert_eq!(k, single, "arm {i} of {ladder:?}"),
            [Reactance::Inductor, Reactance::Capacitor] => found += 1,
            _ => panic!("arm {i} of {ladder:?}"),
        }
    }
    assert_eq!(found, resonators, "{ladder:?}");
}

/// Largest |dB difference| between the ladder's transfer and flat_gain * H
/// on a grid dense in the passband and log-spaced beyond, skipping points
/// below [`RESPONSE_FLOOR_DB`].
pub(crate) fn response_error_db(ladder: &Ladder, h: impl Fn(Complex64) -> Complex64) -> f64 {
    let passband = (0..=400).map(|i| 1.2 * i as f64 / 400.0);
    let stopband = (1..=300).map(|i| 1.2 * 10f64.powf(2.0 * i as f64 / 300.0));
    passband
        .chain(stopband)
        .map(|w| Complex64::new(0.0, w))
        .filter_map(|s| {
            let expected = ladder.flat_gain * h(s).norm();
            let floor = ladder.flat_gain * 10f64.powf(RESPONSE_FLOOR_DB / 20.0);
            (expected > floor).then(|| 20.0 * (ladder.transfer(s).norm() / expected).log10().abs())
        })
        .fold(0.0, f64::max)
}

/// Synthesizes, checks structure and response, and returns the ladder.
fn checked_ladder(approx: AllPole, r: f64, form: Form) -> Ladder {
    let ladder = synthesize_characteristic(&approx.characteristic(r), r, form)
        .unwrap_or_else(|e| panic!("{approx:?}, r = {r}, {form:?}: {e}"));
    assert_structure(&ladder, form, 0);
    assert_eq!((ladder.source_ohm, ladder.load_ohm), (1.0, r));
    let err = response_error_db(&ladder, |s| approx.h(s));
    assert!(
        err <= RESPONSE_TOLERANCE_DB,
        "{approx:?}, r = {r}, {form:?}: response off by {err} dB"
    );
    ladder
}

// Butterworth g_k = 2 sin((2k-1) pi / 2n) (closed form, common practice),
// equal terminations, eps = 1 (the 3.0103 dB edge), n = 1..25, both forms.
#[test]
fn butterworth_equal_terminations_match_closed_form() {
    let mut worst = 0.0_f64;
    for n in 1..=25 {
        for form in FORMS {
            let ladder = checked_ladder(AllPole::Butterworth { n, eps: 1.0 }, 1.0, form);
            let what = format!("Butterworth n = {n}, {form:?}");
            worst = worst.max(max_rel_error(
                &what,
                &values(&ladder),
                &butterworth_g(n),
                ELEMENT_TOLERANCE,
            ));
        }
    }
    println!("Butterworth n <= 25: largest relative element error {worst:e}");
}

// Chebyshev, equal terminations, odd n up to 25: the closed-form recursion
// of Matthaei, Young and Jones (1964), section 4.05 (from memory; it
// reproduces the printed table values checked below).
#[test]
fn chebyshev_odd_equal_terminations_match_myj_recursion() {
    let mut worst = 0.0_f64;
    for ap in [0.01, 0.1, 0.5, 1.0, 3.0] {
        for n in (1..=25).step_by(2) {
            let (g, load) = chebyshev_myj(n, ap);
            assert_eq!(load, 1.0);
            for form in FORMS {
                let ladder = checked_ladder(AllPole::Chebyshev { n, eps: eps_of(ap) }, 1.0, form);
                let what = format!("Chebyshev {ap} dB n = {n}, {form:?}");
                worst = worst.max(max_rel_error(
                    &what,
                    &values(&ladder),
                    &g,
                    ELEMENT_TOLERANCE,
                ));
            }
        }
    }
    println!("Chebyshev odd n <= 25, equal terminations: largest relative element error {worst:e}");
}

// Even Chebyshev in the standard form: load coth^2(beta/4) from the same
// recursion (MYJ 1964 section 4.05). The series-inductor-first ladder ends
// in a shunt C, so g_(n+1) is the load resistance; the dual ends in a
// series L, g_(n+1) is a conductance and the load is tanh^2(beta/4).
#[test]
fn chebyshev_even_standard_matches_myj_recursion() {
    let mut worst = 0.0_f64;
    for ap in [0.01, 0.1, 0.5, 1.0, 3.0] {
        for n in (2..=24).step_by(2) {
            let (g, load) = chebyshev_myj(n, ap);
            for (form, r) in [(Form::MinCapacitor, load), (Form::MinInductor, 1.0 / load)] {
                let ladder = checked_ladder(AllPole::Chebyshev { n, eps: eps_of(ap) }, r, form);
                let what = format!("Chebyshev {ap} dB n = {n}, {form:?}");
                worst = worst.max(max_rel_error(
                    &what,
                    &values(&ladder),
                    &g,
                    ELEMENT_TOLERANCE,
                ));
            }
        }
    }
    println!("Chebyshev even n <= 24, standard form: largest relative element error {worst:e}");
}

// Printed values, MYJ (1964) table 4.05-2 (from memory), each recomputed
// with the closed-form recursion (which gives the 0.1 dB n = 7 g4 as
// 1.5734, not the 1.5374 of circulating copies). Four decimals are
// printed: the tolerance is half a unit in the last place.
#[test]
fn chebyshev_matches_printed_table() {
    const PRINTED_HALF_UNIT: f64 = 5e-5;
    let table: [(f64, usize, &[f64]); 5] = [
        (0.5, 3, &[1.5963, 1.0967, 1.5963]),
        (0.1, 3, &[1.0316, 1.1474, 1.0316]),
        (0.1, 5, &[1.1468, 1.3712, 1.9750, 1.3712, 1.1468]),
        (1.0, 3, &[2.0236, 0.9941, 2.0236]),
        (
            0.1,
            7,
            &[1.1812, 1.4228, 2.0967, 1.5734, 2.0967, 1.4228, 1.1812],
        ),
    ];
    for (ap, n, printed) in table {
        let (recomputed, _) = chebyshev_myj(n, ap);
        for form in FORMS {
            let ladder = checked_ladder(AllPole::Chebyshev { n, eps: eps_of(ap) }, 1.0, form);
            for (k, (got, want)) in values(&ladder).iter().zip(printed).enumerate() {
                assert!(
                    (got - want).abs() <= PRINTED_HALF_UNIT,
                    "{ap} dB n = {n} g{}: got {got}, printed {want}",
                    k + 1
                );
                assert!((recomputed[k] - want).abs() <= PRINTED_HALF_UNIT);
            }
        }
    }
}

/// Elements for arbitrary terminations, the closed form credited to
/// H. Takahasi (1951) as given in L. Weinberg, "Network Analysis and
/// Synthesis", 1962, ch. 13 (from memory; confirmed here to 1e-12 against
/// the synthesis, whose response is checked independently):
/// with a_k = sin((2k-1) pi / 2n),
/// g_1 = 2 a_1 / (eta - xi),
/// g_k g_(k+1) = 4 a_k a_(k+1) / (eta^2 + xi^2 + c sin^2(k pi / n) - 2 eta xi cos(k pi / n)),
/// Chebyshev (c = 1): eta = sinh(asinh(1/eps) / n), xi = sinh(asinh(sqrt(level)/eps) / n);
/// Butterworth (c = 0): eta = eps^(-1/n), xi = (sqrt(level)/eps)^(1/n).
/// This is the ladder with every reflection zero in the left half plane,
/// whose load in the series-first reading is above the source (with -xi,
/// the mirrored zeros, it is the same ladder reversed).
fn takahasi_g(approx: AllPole, level: f64) -> Vec<f64> {
    let n = approx.order();
    let nf = n as f64;
    let eps = approx.eps();
    let (eta, xi, c) = match approx {
        AllPole::Butterworth { .. } => (
            eps.powf(-1.0 / nf),
            (level.sqrt() / eps).powf(1.0 / nf),
            0.0,
        ),
        AllPole::Chebyshev { .. } => (
            ((1.0 / eps).asinh() / nf).sinh(),
            ((level.sqrt() / eps).asinh() / nf).sinh(),
            1.0,
        ),
    };
    let a = |k: usize| ((2 * k - 1) as f64 * PI / (2.0 * nf)).sin();
    let mut g = vec![2.0 * a(1) / (eta - xi)];
    for k in 1..n {
        let t = k as f64 * PI / nf;
        let d = eta * eta + xi * xi + c * t.sin().powi(2) - 2.0 * eta * xi * t.cos();
        g.push(4.0 * a(k) * a(k + 1) / (d * g[k - 1]));
    }
    g
}

/// The all-pole approximations the matrix tests run over.
fn all_pole_matrix(n: usize) -> Vec<AllPole> {
    let mut v = vec![
        AllPole::Butterworth { n, eps: 1.0 },
        AllPole::Butterworth {
            n,
            eps: eps_of(1.0),
        },
    ];
    v.extend([0.01, 0.1, 0.5, 1.0, 3.0].map(|ap| AllPole::Chebyshev { n, eps: eps_of(ap) }));
    v
}

/// Whether a ladder with this ratio and form exists: the level must not be
/// negative, and an even order fixes the side of 1 the ratio lies on
/// (series first: above; shunt first: below).
fn realizable(approx: AllPole, r: f64, form: Form) -> bool {
    let even = approx.order().is_multiple_of(2);
    let side_ok = !even || r == 1.0 || (r > 1.0) == (form == Form::MinCapacitor);
    approx.level(r) >= 0.0 && side_ok
}

const RATIOS: [f64; 5] = [1.0, 0.5, 2.0, 0.2, 5.0];

// Unequal terminations: the Takahasi closed form (see takahasi_g) for
// Butterworth and Chebyshev, odd and even, n = 1..25, every realizable
// ratio and form whose series-first reading has its load above the source
// (in the shunt-first form the values are those of the series-first dual
// with the inverse ratio). The other orientation, possible for odd orders
// only, mirrors just the real reflection zero: a third ladder with no
// closed form here, checked by its response in the matrix below.
#[test]
fn unequal_terminations_match_takahasi_closed_form() {
    let mut worst = 0.0_f64;
    for n in 1..=25 {
        for approx in all_pole_matrix(n) {
            for r in RATIOS.into_iter().filter(|&r| r != 1.0) {
                for form in FORMS.into_iter().filter(|&f| realizable(approx, r, f)) {
                    let series_first_load = if form == Form::MinCapacitor {
                        r
                    } else {
                        1.0 / r
                    };
                    if series_first_load < 1.0 {
                        continue;
                    }
                    let ladder = checked_ladder(approx, r, form);
                    let expected = takahasi_g(approx, approx.level(r));
                    let what = format!("{approx:?}, r = {r}, {form:?}");
                    worst = worst.max(max_rel_error(
                        &what,
                        &values(&ladder),
                        &expected,
                        ELEMENT_TOLERANCE,
                    ));
                }
            }
        }
    }
    println!("unequal terminations, n <= 25: largest relative element error {worst:e}");
}

// The response matrix: every all-pole family above, n = 1..25, every
// realizable ratio, both forms. checked_ladder compares each ladder with
// flat_gain * |H| (the closed-form poles); here the two duals are also
// compared with each other point by point, within the same budget.
#[test]
fn all_pole_responses_match_the_prototype_in_both_forms() {
    let mut worst = 0.0_f64;
    for n in 1..=25 {
        for approx in all_pole_matrix(n) {
            for r in RATIOS {
                let ladders: Vec<Ladder> = FORMS
                    .into_iter()
                    .filter(|&f| realizable(approx, r, f))
                    .map(|f| checked_ladder(approx, r, f))
                    .collect();
                for ladder in &ladders {
                    worst = worst.max(response_error_db(ladder, |s| approx.h(s)));
                }
                if let [a, b] = &ladders[..] {
                    let dual_gap = response_error_db(a, |s| b.transfer(s) / b.flat_gain);
                    assert!(
                        dual_gap <= RESPONSE_TOLERANCE_DB,
                        "{approx:?}, r = {r}: duals differ by {dual_gap} dB"
                    );
                }
            }
        }
    }
    println!("all-pole, n <= 25: largest response error {worst:e} dB");
}

/// The load ratio at which the even-order standard Chebyshev needs no
/// flat loss, coth^2(beta/4) (MYJ 1964 section 4.05, as in chebyshev_myj).
fn chebyshev_even_boundary(ap_db: f64) -> f64 {
    chebyshev_myj(2, ap_db).1
}

// variant_for against the closed-form boundary coth^2(beta/4) of MYJ 1964
// section 4.05 (and its inverse): just outside the band around 1 the
// standard (or, elliptic, zero-at-infinity) form is feasible, just inside
// it the terminations need the reflection zero at DC.
#[test]
fn variant_for_follows_the_termination_boundary() {
    use nocoil::approx::{Family, Variant};
    const SIDE: f64 = 1e-9; // relative step off the boundary, above the level tolerance
    for ap in [0.01, 0.1, 0.5, 1.0, 3.0] {
        let eps = eps_of(ap);
        let upper = chebyshev_even_boundary(ap);
        for (family, keeps_dc) in [
            (Family::Chebyshev, Variant::Standard),
            (Family::Elliptic, Variant::ZeroAtInfinity),
        ] {
            for n in [2, 4, 10] {
                for boundary in [upper, 1.0 / upper] {
                    let outside = if boundary > 1.0 {
                        boundary * (1.0 + SIDE)
                    } else {
                        boundary * (1.0 - SIDE)
                    };
                    let inside = if boundary > 1.0 {
                        boundary * (1.0 - SIDE)
                    } else {
                        boundary * (1.0 + SIDE)
                    };
                    assert_eq!(
                        nocoil::synth::variant_for(family, n, eps, outside),
                        keeps_dc,
                        "{family:?} {ap} dB r = {outside}"
                    );
                    assert_eq!(
                        nocoil::synth::variant_for(family, n, eps, inside),
                        Variant::ReflectionAtDc
                    );
                }
                assert_eq!(
                    nocoil::synth::variant_for(family, n, eps, 1.0),
                    Variant::ReflectionAtDc
                );
                assert_eq!(
                    nocoil::synth::variant_for(family, n + 1, eps, 1.0),
                    Variant::Standard
                );
            }
        }
        for n in [1, 2, 7, 8] {
            assert_eq!(
                nocoil::synth::variant_for(Family::Butterworth, n, eps, 1.0),
                Variant::Standard
            );
        }
    }
}

/// A Chebyshev characteristic for the error tests.
fn chebyshev(n: usize, ap_db: f64, r: f64) -> Characteristic {
    AllPole::Chebyshev {
        n,
        eps: eps_of(ap_db),
    }
    .characteristic(r)
}

#[test]
fn bad_input_gives_the_right_error() {
    let ch = chebyshev(5, 0.5, 1.0);
    for r in [0.0, -1.0, f64::NAN, f64::INFINITY] {
        let got = synthesize_characteristic(&ch, r, Form::MinCapacitor);
        assert!(
            matches!(got, Err(SynthError::InvalidLoadRatio { .. })),
            "r = {r}: {got:?}"
        );
    }

    // An even order with the load below the source cannot start with a
    // series inductor; the error names the inverse ratio, which works.
    let below = 1.0 / chebyshev_even_boundary(0.5);
    let got = synthesize_characteristic(&chebyshev(4, 0.5, below), below, Form::MinCapacitor);
    match got {
        Err(SynthError::EvenOrderOrientation { inverse, needs, .. }) => {
            assert!(
                (inverse - 1.0 / below).abs() < 1e-12 && needs == "above",
                "{got:?}"
            );
            assert!(synthesize_characteristic(
                &chebyshev(4, 0.5, inverse),
                inverse,
                Form::MinCapacitor
            )
            .is_ok());
        }
        other => panic!("expected EvenOrderOrientation, got {other:?}"),
    }

    // Reflection zeros of another ratio.
    let got = synthesize_characteristic(&chebyshev(5, 0.5, 2.0), 3.0, Form::MinCapacitor);
    assert!(
        matches!(got, Err(SynthError::InconsistentReflection { .. })),
        "{got:?}"
    );

    let mut unstable = ch.clone();
    unstable.poles[0].re = -unstable.poles[0].re;
    let got = synthesize_characteristic(&unstable, 1.0, Form::MinCapacitor);
    assert!(
        matches!(got, Err(SynthError::UnstablePole { .. })),
        "{got:?}"
    );

    let mut short = ch.clone();
    short.reflection_zeros.pop();
    let got = synthesize_characteristic(&short, 1.0, Form::MinCapacitor);
    assert!(matches!(got, Err(SynthError::RootCount { .. })), "{got:?}");
    let mut crowded = ch.clone();
    crowded.transmission_zeros = vec![2.0, 3.0, 4.0];
    let got = synthesize_characteristic(&crowded, 1.0, Form::MinCapacitor);
    assert!(matches!(got, Err(SynthError::RootCount { .. })), "{got:?}");
    let mut negative = ch.clone();
    negative.transmission_zeros = vec![-2.0];
    let got = synthesize_characteristic(&negative, 1.0, Form::MinCapacitor);
    assert!(
        matches!(got, Err(SynthError::InvalidTransmissionZero { .. })),
        "{got:?}"
    );

    let mut no_gain = ch.clone();
    no_gain.dc_gain = 0.0;
    let got = synthesize_characteristic(&no_gain, 1.0, Form::MinCapacitor);
    assert!(
        matches!(got, Err(SynthError::InvalidDcGain { .. })),
        "{got:?}"
    );

    // One reflection zero doubled in place of its conjugate: same |S11(0)|,
    // but no real polynomial.
    let mut unpaired = chebyshev(5, 0.5, 2.0);
    let partner = unpaired
        .reflection_zeros
        .iter()
        .position(|z| z.im < -1e-3)
        .unwrap();
    unpaired.reflection_zeros[partner] = unpaired.reflection_zeros[partner].conj();
    let got = synthesize_characteristic(&unpaired, 2.0, Form::MinCapacitor);
    assert!(
        matches!(got, Err(SynthError::NotConjugate { .. })),
        "{got:?}"
    );

    // Butterworth poles with Chebyshev reflection zeros (equal terminations,
    // so |S11(0)| = 0 agrees): the poles do not fit.
    let mut mixed = ch.clone();
    mixed.poles = AllPole::Butterworth {
        n: 5,
        eps: eps_of(0.5),
    }
    .roots(1.0);
    let got = synthesize_characteristic(&mixed, 1.0, Form::MinCapacitor);
    assert!(
        matches!(got, Err(SynthError::InconsistentPole { .. })),
        "{got:?}"
    );
}

/// A prototype from approx (checked there against scipy.signal's buttap,
/// cheb1ap and ellipap and a 40-digit mpmath oracle, tests/approx.rs).
fn prototype(family: Family, n: usize, ap_db: f64, as_db: f64, variant: Variant) -> Prototype {
    Prototype::new(Params {
        family,
        order: n,
        passband_ripple_db: ap_db,
        stopband_attenuation_db: as_db,
        variant,
    })
    .unwrap_or_else(|e| panic!("{family:?} n = {n}: {e}"))
}

/// Synthesizes a prototype, checks structure and response against its zpk,
/// and returns the ladder.
pub(crate) fn checked_prototype_ladder(proto: &Prototype, r: f64, form: Form) -> Ladder {
    let what = format!("{:?}, r = {r}, {form:?}", proto.params);
    let ladder = synthesize(proto, r, form).unwrap_or_else(|e| panic!("{what}: {e}"));
    assert_structure(&ladder, form, proto.transmission_zeros.len());
    let err = response_error_db(&ladder, |s| proto.zpk.eval(s));
    assert!(
        err <= RESPONSE_TOLERANCE_DB,
        "{what}: response off by {err} dB"
    );
    ladder
}

// Through the approx stage: Butterworth at the 3.0103 dB edge (eps = 1)
// against g_k = 2 sin((2k-1) pi / 2n), Chebyshev odd (equal terminations)
// and even (load coth^2(beta/4)) against the MYJ 1964 section 4.05
// recursion, n = 1..25, both forms; and the flat gain's |H(0)| against
// the prototype's own zpk.
#[test]
fn all_pole_prototypes_match_closed_forms() {
    let mut worst = 0.0_f64;
    let three_db = 10.0 * 2f64.log10();
    for n in 1..=25 {
        let proto = prototype(Family::Butterworth, n, three_db, 0.0, Variant::Standard);
        for form in FORMS {
            let ladder = checked_prototype_ladder(&proto, 1.0, form);
            let what = format!("Butterworth n = {n}, {form:?}");
            worst = worst.max(max_rel_error(
                &what,
                &values(&ladder),
                &butterworth_g(n),
                ELEMENT_TOLERANCE,
            ));
        }
        for ap in [0.01, 0.1, 0.5, 1.0, 3.0] {
            let proto = prototype(Family::Chebyshev, n, ap, 0.0, Variant::Standard);
            let (g, load) = chebyshev_myj(n, ap);
            for (form, r) in [(Form::MinCapacitor, load), (Form::MinInductor, 1.0 / load)] {
                let ladder = checked_prototype_ladder(&proto, r, form);
                let what = format!("Chebyshev {ap} dB n = {n}, {form:?}");
                worst = worst.max(max_rel_error(
                    &what,
                    &values(&ladder),
                    &g,
                    ELEMENT_TOLERANCE,
                ));
                let h0 = proto.zpk.eval(Complex64::new(0.0, 0.0)).norm();
                let expected_flat = r / ((1.0 + r) * h0);
                assert!(
                    (ladder.flat_gain - expected_flat).abs() <= 1e-14 * expected_flat,
                    "{what}"
                );
            }
        }
    }
    println!("all-pole prototypes, n <= 25: largest relative element error {worst:e}");
}

/// The (variant, ratio, form) cases an elliptic order runs: odd orders
/// with equal and unequal terminations; even orders in the zero-at-infinity
/// form just outside the band its DC loss excludes, and in the
/// reflection-at-DC form with equal and unequal terminations (the
/// orientation an even order fixes: series first above 1, shunt first
/// below).
fn elliptic_cases(n: usize, ap_db: f64) -> Vec<(Variant, f64, Form)> {
    use Form::{MinCapacitor as Series, MinInductor as Shunt};
    if n % 2 == 1 {
        let both = |r: f64| {
            [
                (Variant::Standard, r, Series),
                (Variant::Standard, r, Shunt),
            ]
        };
        return [both(1.0), both(2.0), both(0.5)].concat();
    }
    let eps = eps_of(ap_db);
    let beyond = 1.5 * ((1.0 + eps * eps).sqrt() + eps).powi(2);
    vec![
        (Variant::ZeroAtInfinity, beyond, Series),
        (Variant::ZeroAtInfinity, 1.0 / beyond, Shunt),
        (Variant::ReflectionAtDc, 1.0, Series),
        (Variant::ReflectionAtDc, 1.0, Shunt),
        (Variant::ReflectionAtDc, 2.0, Series),
        (Variant::ReflectionAtDc, 0.5, Shunt),
    ]
}

// Elliptic ladders against the prototype's response (its zpk; see
// prototype()) for several (Ap, As), each up to the highest order it
// holds (measured; beyond it the synthesis refuses with a typed error,
// never a wrong ladder): odd orders 3..15 and even 4..14 in both modified
// forms for the ordinary masks, lower orders for the two narrow
// transitions (ws - 1 = 6e-5 at (1, 15) n = 9 and 6e-6 at (3, 10) n = 7).
// Both forms; where both forms exist for one ratio, they must agree.
#[test]
fn elliptic_ladders_realize_the_prototype() {
    const SPECS: [(f64, f64, usize); 7] = [
        (0.01, 80.0, 16),
        (0.1, 70.0, 16),
        (0.5, 60.0, 15),
        (0.1, 40.0, 14),
        (1.0, 30.0, 11),
        (1.0, 15.0, 9),
        (3.0, 10.0, 7),
    ];
    let mut worst = 0.0_f64;
    for (ap, att, highest) in SPECS {
        for n in 3..=highest {
            for (variant, r, form) in elliptic_cases(n, ap) {
                let proto = prototype(Family::Elliptic, n, ap, att, variant);
                let ladder = checked_prototype_ladder(&proto, r, form);
                worst = worst.max(response_error_db(&ladder, |s| proto.zpk.eval(s)));
                if n % 2 == 1 {
                    let other = if form == Form::MinCapacitor {
                        Form::MinInductor
                    } else {
                        Form::MinCapacitor
                    };
                    let dual = checked_prototype_ladder(&proto, r, other);
                    let gap = response_error_db(&ladder, |s| dual.transfer(s) / dual.flat_gain);
                    assert!(
                        gap <= RESPONSE_TOLERANCE_DB,
                        "({ap}, {att}) n = {n}, r = {r}: duals differ by {gap} dB"
                    );
                }
            }
        }
    }
    println!("elliptic: largest response error {worst:e} dB");
}

// What the prototype entry refuses: the standard even elliptic (a finite
// gain at infinity), and a ratio inside the band around 1 that an even
// standard Chebyshev cannot reach (the error names the boundary ratios,
// the MYJ coth^2(beta/4) and its inverse).
#[test]
fn prototype_entry_refuses_what_no_ladder_realizes() {
    let even_standard = prototype(Family::Elliptic, 4, 0.1, 40.0, Variant::Standard);
    let got = synthesize(&even_standard, 1.0, Form::MinCapacitor);
    assert!(
        matches!(got, Err(SynthError::NotALadder { order: 4, .. })),
        "{got:?}"
    );

    let chebyshev = prototype(Family::Chebyshev, 4, 0.5, 0.0, Variant::Standard);
    match synthesize(&chebyshev, 1.0, Form::MinCapacitor) {
        Err(SynthError::InfeasibleRatio { lower, upper, .. }) => {
            let boundary = chebyshev_even_boundary(0.5);
            assert!(
                (upper - boundary).abs() < 1e-12 * boundary
                    && (lower * boundary - 1.0).abs() < 1e-12
            );
        }
        other => panic!("expected InfeasibleRatio, got {other:?}"),
    }
}

// Time per synthesis (the report asks for n = 15 elliptic and n = 25
// Chebyshev), with the ladders checked like every other.
#[test]
fn synthesis_time_at_the_highest_orders() {
    let cases = [
        (
            prototype(Family::Elliptic, 15, 0.01, 80.0, Variant::Standard),
            1.0,
        ),
        (
            prototype(Family::Chebyshev, 25, 0.1, 0.0, Variant::Standard),
            1.0,
        ),
    ];
    for (proto, r) in &cases {
        const RUNS: u32 = 20;
        let start = std::time::Instant::now();
        for _ in 0..RUNS {
            checked_synthesis(proto, *r);
        }
        println!(
            "{:?}: {:?} per synthesis",
            proto.params,
            start.elapsed() / RUNS
        );
        checked_prototype_ladder(proto, *r, Form::MinCapacitor);
    }
}

/// One synthesis, whose result must be a ladder.
fn checked_synthesis(proto: &Prototype, r: f64) {
    assert!(synthesize(proto, r, Form::MinCapacitor).is_ok());
}

//! Tests of approx.
//!
//! The references are not ours: tests/fixtures/scipy_prototypes.json, made
//! by tests/fixtures/gen_scipy_fixtures.py (scipy 1.17.1, numpy 2.4.6,
//! mpmath 1.3.0; the versions are recorded in the file's `generator`). Each
//! check names the table it reads. The response checks (ripple, stopband
//! levels, reflection roots) test the defining identities of the
//! approximations rather than any table.

use nocoil::approx::{min_order, ApproxError, Family, Params, Prototype, Variant, Zpk, MAX_ORDER};
use num_complex::Complex64;
use serde::Deserialize;
use std::sync::OnceLock;

// ------------------------------------------------------------- tolerances

/// Butterworth and Chebyshev against scipy: both evaluate the same closed
/// forms in double precision, so they differ by rounding only. The gain is
/// a product of up to 25 factors (about 25 ulp); 1e-13 leaves a margin of
/// 20 over that and still catches any formula error.
const ALL_POLE_TOL: f64 = 1e-13;

/// Elliptic against scipy, where scipy itself agrees with the 40-digit
/// oracle to `SCIPY_TRUSTED`: our error (below `ELLIPTIC_ORACLE_TOL`) plus
/// scipy's, which the generator's |H(j1)| gain normalization of the mapped
/// variants roughly doubles (measured worst: 1.3e-12, the gain of the
/// type C n = 6, 3 dB / 10 dB case).
const ELLIPTIC_SCIPY_TOL: f64 = 2.5e-12;

/// The generator's threshold for trusting scipy's elliptic zpk (see
/// `SCIPY_TRUSTED` in the script); entries above it are compared with the
/// mpmath oracle only.
const SCIPY_TRUSTED: f64 = 1e-12;

/// Elliptic (standard and mapped) against the 40-digit mpmath oracle,
/// relative. Measured worst: 1.65e-14 over 343 cases up to n = 25; the
/// error grows only with the number of rounded operations (about n), and
/// 1e-13 keeps a margin of 6 for other libm implementations of sin, exp and
/// asinh.
const ELLIPTIC_ORACLE_TOL: f64 = 1e-13;

/// Relative error of every root (pole, zero, reflection root) that the
/// reference tests above guarantee: the largest of their tolerances.
const ROOT_REL_ERR: f64 = 1e-13;

/// Rounding of one evaluation of H from its factors, relative: about 2n
/// operations of 1 ulp each at n = 25, with a margin of 10.
const EVAL_REL_ERR: f64 = 1e-13;

/// dB per unit relative change of |H|: 20 / ln 10.
const DB_PER_NEPER: f64 = 8.685889638065036;

/// Roots of eps^2 R^2 + level = 0 against the mpmath polynomial roots. The
/// reference roots inherit the rounding of scipy's zpk they were built
/// from (at most 1e-14 for these orders, n <= 8, by the comparisons above)
/// through the root conditioning of the degree-2n polynomial (about 1 to
/// 10 here); measured worst 3e-15.
const FLAT_LOSS_ROOT_TOL: f64 = 1e-13;

// --------------------------------------------------------------- fixtures

#[derive(Deserialize)]
struct Fixtures {
    generator: Generator,
    butterworth: Vec<ZpkCase>,
    chebyshev: Vec<ZpkCase>,
    elliptic: Vec<ZpkCase>,
    elliptic_mp: Vec<ZpkCase>,
    variants: Vec<ZpkCase>,
    variants_mp: Vec<ZpkCase>,
    reflection_roots: Vec<RootsCase>,
    min_order: Vec<MaskCase>,
    integer_masks: Vec<MaskCase>,
}

#[derive(Deserialize)]
struct Generator {
    scipy: String,
}

#[derive(Deserialize)]
struct ZpkCase {
    #[serde(default)]
    family: Option<Family>,
    #[serde(default)]
    variant: Option<Variant>,
    order: usize,
    ripple_db: f64,
    #[serde(default)]
    attenuation_db: f64,
    zeros: Vec<[f64; 2]>,
    poles: Vec<[f64; 2]>,
    gain: f64,
    #[serde(default)]
    stopband_edge: Option<f64>,
    #[serde(default)]
    scipy_vs_mpmath: f64,
}

#[derive(Deserialize)]
struct RootsCase {
    family: Family,
    variant: Variant,
    order: usize,
    ripple_db: f64,
    attenuation_db: f64,
    level: f64,
    roots: Vec<[f64; 2]>,
}

#[derive(Deserialize)]
struct MaskCase {
    family: Family,
    ws: f64,
    ripple_db: f64,
    attenuation_db: f64,
    order: usize,
    /// The real-valued order scipy computed (fixture `min_order` only).
    #[serde(default)]
    needed: Option<f64>,
    /// What scipy's *ord returned (fixture `integer_masks` only).
    #[serde(default)]
    scipy_order: Option<usize>,
}

impl MaskCase {
    /// Our answer for this mask, and the mask in words for messages.
    fn ours(&self) -> (Result<usize, ApproxError>, String) {
        let got = min_order(self.family, self.ws, self.ripple_db, self.attenuation_db);
        let what = format!(
            "{:?} ws={} Ap={} As={}",
            self.family, self.ws, self.ripple_db, self.attenuation_db
        );
        (got, what)
    }
}

fn fixtures() -> &'static Fixtures {
    static CELL: OnceLock<Fixtures> = OnceLock::new();
    CELL.get_or_init(|| {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/tests/fixtures/scipy_prototypes.json"
        );
        let text = std::fs::read_to_string(path).expect("fixture file is committed");
        serde_json::from_str(&text).expect("fixture file parses")
    })
}

// ---------------------------------------------------------------- helpers

pub(crate) fn complex(pairs: &[[f64; 2]]) -> Vec<Complex64> {
    pairs
        .iter()
        .map(|&[re, im]| Complex64::new(re, im))
        .collect()
}

/// Largest |got - want| / |want| after pairing each wanted point with its
/// nearest unused got point; infinite when the counts differ.
pub(crate) fn set_mismatch(got: &[Complex64], want: &[Complex64]) -> f64 {
    if got.len() != want.len() {
        return f64::INFINITY;
    }
    let mut unused = got.to_vec();
    want.iter().fold(0.0, |worst: f64, w| {
        let (i, d) = unused.iter().map(|g| (g - w).norm()).enumerate().fold(
            (0, f64::INFINITY),
            |best, (i, d)| if d < best.1 { (i, d) } else { best },
        );
        unused.swap_remove(i);
        worst.max(d / w.norm())
    })
}

fn relative(got: f64, want: f64) -> f64 {
    ((got - want) / want).abs()
}

fn params(family: Family, order: usize, ap: f64, as_: f64, variant: Variant) -> Params {
    Params {
        family,
        order,
        passband_ripple_db: ap,
        stopband_attenuation_db: as_,
        variant,
    }
}

fn build(p: Params) -> Prototype {
    Prototype::new(p).unwrap_or_else(|e| panic!("{p:?} refused: {e}"))
}

fn build_case(family: Family, case: &ZpkCase) -> Prototype {
    let variant = case.variant.unwrap_or(Variant::Standard);
    build(params(
        family,
        case.order,
        case.ripple_db,
        case.attenuation_db,
        variant,
    ))
}

/// Worst relative error of poles, zeros, gain and stopband edge.
fn zpk_error(proto: &Prototype, case: &ZpkCase) -> f64 {
    let edge = match (proto.stopband_edge, case.stopband_edge) {
        (Some(got), Some(want)) => relative(got, want),
        (None, None) => 0.0,
        _ => f64::INFINITY,
    };
    set_mismatch(&proto.zpk.poles, &complex(&case.poles))
        .max(set_mismatch(&proto.zpk.zeros, &complex(&case.zeros)))
        .max(relative(proto.zpk.gain, case.gain))
        .max(edge)
}

/// Checks every case of a table against `family`'s prototype and prints
/// the worst error.
fn check_table<'a>(name: &str, family: Family, cases: impl Iterator<Item = &'a ZpkCase>, tol: f64) {
    let mut worst = (0.0, String::new());
    let mut count = 0;
    for case in cases {
        let err = zpk_error(&build_case(family, case), case);
        let what = format!(
            "{:?} n={} Ap={} As={}",
            case.variant, case.order, case.ripple_db, case.attenuation_db
        );
        assert!(
            err <= tol,
            "{name}: {what}: expected relative error <= {tol:e}, got {err:e}"
        );
        if err > worst.0 {
            worst = (err, what);
        }
        count += 1;
    }
    assert!(count > 0, "{name}: no cases");
    println!(
        "{name}: {count} cases, worst relative error {:.2e} at {}",
        worst.0, worst.1
    );
}

/// Every family, order and variant over a few masks.
fn all_prototypes() -> Vec<Prototype> {
    let mut out = Vec::new();
    for order in 1..=MAX_ORDER {
        for ap in [0.01, 0.5, 3.0103] {
            out.push(build(params(
                Family::Butterworth,
                order,
                ap,
                0.0,
                Variant::Standard,
            )));
            out.push(build(params(
                Family::Chebyshev,
                order,
                ap,
                0.0,
                Variant::Standard,
            )));
            if order % 2 == 0 {
                out.push(build(params(
                    Family::Chebyshev,
                    order,
                    ap,
                    0.0,
                    Variant::ReflectionAtDc,
                )));
            }
        }
    }
    for order in 1..=MAX_ORDER {
        for (ap, as_) in [(0.1, 40.0), (0.5, 60.0), (0.01, 80.0), (1.0, 30.0)] {
            let mut variants = vec![Variant::Standard];
            if order % 2 == 0 {
                variants.extend([Variant::ZeroAtInfinity, Variant::ReflectionAtDc]);
            }
            for v in variants {
                out.push(build(params(Family::Elliptic, order, ap, as_, v)));
            }
        }
    }
    out
}

/// Golden-section search for the extremum of `f` in (a, b); `sign` = 1 for
/// a maximum, -1 for a minimum. Returns where it is.
fn extremum(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64, sign: f64) -> f64 {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    // 0.618^80 shrinks any bracket below the spacing of doubles near it.
    for _ in 0..80 {
        let (c, d) = (b - g * (b - a), a + g * (b - a));
        if sign * f(c) > sign * f(d) {
            b = d;
        } else {
            a = c;
        }
    }
    (a + b) / 2.0
}

/// Asserts loss(w) = want within what the root accuracy allows there.
fn assert_loss(proto: &Prototype, w: f64, want: f64, what: &str) {
    let (got, tol) = (proto.attenuation_db(w), loss_tol(proto, w));
    assert!(
        (got - want).abs() <= tol,
        "{:?}: {what} at w = {w}: expected {want} dB within {tol:e}, got {got}",
        proto.params
    );
}

/// First-order relative change of H(s) per unit relative error in every
/// root and in s itself: sum over roots r of (|r| + |s|) / |s - r|. Near a
/// pole (the band edge of a narrow, high-order elliptic) this grows without
/// bound: a double-precision zpk cannot pin the response down there, so
/// each level check allows exactly what the verified root accuracy implies.
fn sensitivity(zpk: &Zpk, s: Complex64) -> f64 {
    zpk.poles
        .iter()
        .chain(&zpk.zeros)
        .map(|r| (r.norm() + s.norm()) / (s - r).norm())
        .sum()
}

/// Tolerance of a loss (dB) evaluated at the normalized frequency w.
fn loss_tol(proto: &Prototype, w: f64) -> f64 {
    DB_PER_NEPER * (EVAL_REL_ERR + ROOT_REL_ERR * sensitivity(&proto.zpk, Complex64::new(0.0, w)))
}

fn positive_axis(roots: &[Complex64]) -> Vec<f64> {
    let mut w: Vec<f64> = roots.iter().map(|r| r.im).filter(|&w| w > 0.0).collect();
    w.sort_by(f64::total_cmp);
    w
}

// ------------------------------------------------------- zpk vs references

/// scipy.signal.buttap rescaled to the recorded edge loss (fixture
/// `butterworth`, including Ap = 10 log10 2 where buttap is unscaled).
#[test]
fn butterworth_matches_scaled_buttap() {
    let f = fixtures();
    assert_eq!(f.generator.scipy, "1.17.1");
    check_table(
        "butterworth",
        Family::Butterworth,
        f.butterworth.iter(),
        ALL_POLE_TOL,
    );
}

/// scipy.signal.cheb1ap (fixture `chebyshev`).
#[test]
fn chebyshev_matches_cheb1ap() {
    check_table(
        "chebyshev",
        Family::Chebyshev,
        fixtures().chebyshev.iter(),
        ALL_POLE_TOL,
    );
}

/// scipy.signal.ellipap (fixture `elliptic`), where scipy agrees with the
/// mpmath oracle; the stopband edge is mpmath's 1/k.
#[test]
fn elliptic_matches_ellipap() {
    let trusted = fixtures()
        .elliptic
        .iter()
        .filter(|c| c.scipy_vs_mpmath < SCIPY_TRUSTED);
    check_table(
        "elliptic vs scipy",
        Family::Elliptic,
        trusted,
        ELLIPTIC_SCIPY_TOL,
    );
}

/// The 40-digit mpmath evaluation (fixture `elliptic_mp`), and the same
/// pushed through the w^2 maps in mpmath (fixture `variants_mp`), up to the
/// largest supported order.
#[test]
fn elliptic_matches_mpmath_oracle() {
    let f = fixtures();
    let cases = f.elliptic_mp.iter().chain(&f.variants_mp);
    let supported = cases.filter(|c| c.order <= MAX_ORDER);
    check_table(
        "elliptic vs mpmath",
        Family::Elliptic,
        supported,
        ELLIPTIC_ORACLE_TOL,
    );
}

/// scipy's even-order zpk pushed through the w^2 maps by the generator
/// (fixture `variants`; its gain comes from |H(j1)|, ours from DC).
#[test]
fn variants_match_mapped_scipy() {
    let f = fixtures();
    for (family, tol) in [
        (Family::Chebyshev, ALL_POLE_TOL),
        (Family::Elliptic, ELLIPTIC_SCIPY_TOL),
    ] {
        let cases = f.variants.iter().filter(|c| c.family == Some(family));
        check_table(&format!("{family:?} variants vs scipy"), family, cases, tol);
    }
}

// ------------------------------------------------------------ min_order

/// scipy.signal.buttord / cheb1ord / ellipord, analog, wp = 1 (fixture
/// `min_order`); beyond the family's largest order the error must carry
/// the same real-valued order scipy computed.
#[test]
fn min_order_matches_scipy_ord() {
    let f = fixtures();
    // The same formulas on both sides (scipy's ellipk/ellipkm1 against our
    // Landen products for the elliptic), each good to a few 1e-16 over
    // these masks; measured worst 2.8e-16.
    const NEEDED_TOL: f64 = 1e-13;
    let mut too_high = 0;
    let mut worst_needed: f64 = 0.0;
    for c in &f.min_order {
        let (got, what) = c.ours();
        let needed = c.needed.expect("min_order cases record scipy's real order");
        if c.order <= c.family.max_order() {
            assert_eq!(got, Ok(c.order), "{what}");
            continue;
        }
        too_high += 1;
        match got {
            Err(ApproxError::OrderTooHigh {
                family,
                needed: ours,
                max,
            }) => {
                assert_eq!((family, max), (c.family, c.family.max_order()));
                assert!(
                    relative(ours, needed) < NEEDED_TOL,
                    "needed {ours} vs scipy {needed}"
                );
                worst_needed = worst_needed.max(relative(ours, needed));
            }
            other => panic!("{what}: expected OrderTooHigh, got {other:?}"),
        }
    }
    println!(
        "min_order: {} masks, {too_high} beyond the supported order, real order within {worst_needed:.1e}",
        f.min_order.len()
    );
}

/// Masks built in mpmath so the exact order is an integer n, then rounded
/// to double (fixture `integer_masks`): min_order must say n. scipy's *ord,
/// which has no tolerance, says n + 1 for many of them.
#[test]
fn min_order_of_exact_integer_masks_is_not_rounded_up() {
    let f = fixtures();
    let mut scipy_rounded_up = 0;
    for c in &f.integer_masks {
        let (got, what) = c.ours();
        assert_eq!(got, Ok(c.order), "{what}");
        scipy_rounded_up += usize::from(c.scipy_order != Some(c.order));
    }
    println!(
        "integer masks: {} cases, scipy rounds {scipy_rounded_up} up",
        f.integer_masks.len()
    );
}

/// The mask a prototype realizes gives back its order, and the order found
/// for a mask meets it while one less does not (the property scipy's tests
/// check for their *ord functions).
#[test]
fn min_order_meets_the_mask_and_is_minimal() {
    for (ap, as_) in [(0.1, 40.0), (0.5, 60.0), (1.0, 30.0), (0.01, 80.0)] {
        for n in 1..=MAX_ORDER {
            let proto = build(params(Family::Elliptic, n, ap, as_, Variant::Standard));
            let edge = proto.stopband_edge.expect("elliptic has a stopband edge");
            // The edge is rounded to a double: ws - 1 carries a relative
            // error 1e-16 / (ws - 1), and the degree about a quarter of
            // that; beyond ws - 1 = 1e-6 it stays below ORDER_TOLERANCE.
            if edge - 1.0 > 1e-6 {
                assert_eq!(
                    min_order(Family::Elliptic, edge, ap, as_),
                    Ok(n),
                    "n={n} {ap} {as_}"
                );
            }
        }
        for ws in [1.05, 1.3, 2.0, 4.0] {
            for family in [Family::Butterworth, Family::Chebyshev, Family::Elliptic] {
                let Ok(n) = min_order(family, ws, ap, as_) else {
                    continue;
                };
                let proto = |n| build(params(family, n, ap, as_, Variant::Standard));
                let (found, loss) = (proto(n), proto(n).attenuation_db(ws));
                assert!(
                    loss >= as_ - loss_tol(&found, ws),
                    "{family:?} n={n} ws={ws}: {loss} < {as_}"
                );
                if n > 1 {
                    assert!(
                        proto(n - 1).attenuation_db(ws) < as_,
                        "{family:?} n={n} ws={ws}: n-1 already meets the mask"
                    );
                }
            }
        }
    }
}

// ------------------------------------------------------- the response

/// The loss at the passband edge is Ap for every family, order and variant
/// (the usual normalization, common practice; |H(j1)|^2 = 1/(1+eps^2)).
#[test]
fn loss_at_the_passband_edge_is_the_ripple() {
    for proto in all_prototypes() {
        let ap = proto.params.passband_ripple_db;
        assert_loss(&proto, 1.0, ap, "passband edge");
    }
}

/// Passband: 0 <= loss <= Ap everywhere (sampled), every ripple peak between
/// consecutive reflection zeros reaches exactly Ap, and DC is at Ap exactly
/// when it is not a reflection zero (even standard and type B forms).
#[test]
fn passband_is_equiripple_at_the_ripple() {
    for proto in all_prototypes() {
        let ap = proto.params.passband_ripple_db;
        let loss = |w: f64| proto.attenuation_db(w);
        let context = format!("{:?}", proto.params);
        // sin-spaced samples follow the clustering of ripples near w = 1.
        for i in 0..=4000 {
            let w = (i as f64 / 4000.0 * std::f64::consts::FRAC_PI_2).sin();
            let (l, tol) = (loss(w), loss_tol(&proto, w));
            assert!(
                (-tol..=ap + tol).contains(&l),
                "{context}: loss {l} at {w} (tolerance {tol:e})"
            );
        }
        if proto.params.family == Family::Butterworth {
            continue;
        }
        let mut zeros = positive_axis(&proto.reflection_roots(0.0));
        zeros.dedup();
        let dc_is_zero = proto
            .reflection_roots(0.0)
            .contains(&Complex64::new(0.0, 0.0));
        if dc_is_zero {
            zeros.insert(0, 0.0);
        } else {
            assert_loss(&proto, 0.0, ap, "DC");
        }
        for pair in zeros.windows(2) {
            assert_loss(
                &proto,
                extremum(loss, pair[0], pair[1], 1.0),
                ap,
                "ripple peak",
            );
        }
    }
}

/// Stopband (elliptic): loss >= As beyond the edge (sampled), As exactly at
/// the edge, at every minimum between consecutive transmission zeros, and
/// at infinity for the standard even form.
#[test]
fn stopband_is_equiripple_at_the_attenuation() {
    for proto in all_prototypes()
        .into_iter()
        .filter(|p| p.params.family == Family::Elliptic)
    {
        let as_ = proto.params.stopband_attenuation_db;
        let loss = |w: f64| proto.attenuation_db(w);
        let context = format!("{:?}", proto.params);
        let edge = proto.stopband_edge.expect("elliptic has a stopband edge");
        assert_loss(&proto, edge, as_, "stopband edge");
        let zeros = &proto.transmission_zeros;
        let top = zeros.last().copied().unwrap_or(edge) * 10.0;
        for i in 0..=4000 {
            let w = edge * (top / edge).powf(i as f64 / 4000.0);
            let tol = loss_tol(&proto, w);
            assert!(
                loss(w) >= as_ - tol,
                "{context}: loss {} at {w} (tolerance {tol:e})",
                loss(w)
            );
        }
        for pair in zeros.windows(2) {
            assert_loss(
                &proto,
                extremum(loss, pair[0], pair[1], -1.0),
                as_,
                "stopband dip",
            );
        }
        let even_standard =
            proto.params.order % 2 == 0 && proto.params.variant == Variant::Standard;
        if even_standard {
            // 1e9 is infinity to within (w_zmax / w)^2 < 1e-14 relative.
            assert_loss(&proto, 1e9, as_, "infinity");
        }
    }
}

// ---------------------------------------------------- reflection roots

/// Level 0: n roots on the jw axis, where |H| = 1 (the zeros of R).
#[test]
fn reflection_zeros_are_on_the_axis_at_full_transmission() {
    for proto in all_prototypes() {
        let roots = proto.reflection_roots(0.0);
        assert_eq!(roots.len(), proto.params.order, "{:?}", proto.params);
        for r in roots {
            assert_eq!(r.re, 0.0, "{:?}: {r}", proto.params);
            assert_loss(&proto, r.im, 0.0, "reflection zero");
        }
    }
}

/// 0 < level < 1: the roots satisfy eps^2 R(-js)^2 + level = 0, checked
/// through the zpk alone: H(s) H(-s) = 1 / (1 + eps^2 R(-js)^2), so
/// (1 - level) H(r) H(-r) = 1 at each root. Level 1 gives the poles exactly.
#[test]
fn flat_loss_roots_satisfy_the_defining_identity() {
    for proto in all_prototypes() {
        assert_eq!(
            proto.reflection_roots(1.0),
            proto.zpk.poles,
            "{:?}",
            proto.params
        );
        for level in [0.05, 0.5, 0.95] {
            let roots = proto.reflection_roots(level);
            assert_eq!(roots.len(), proto.params.order);
            for r in &roots {
                assert!(
                    r.re < 0.0,
                    "{:?}: root {r} not in the left half plane",
                    proto.params
                );
                let value = proto.zpk.eval(*r) * proto.zpk.eval(-r) * (1.0 - level);
                let tol = 2.0 * EVAL_REL_ERR
                    + ROOT_REL_ERR * (sensitivity(&proto.zpk, *r) + sensitivity(&proto.zpk, -r));
                assert!(
                    (value - 1.0).norm() <= tol,
                    "{:?} level {level}: {value} (tolerance {tol:e})",
                    proto.params
                );
                assert!(
                    roots.contains(&r.conj()),
                    "{:?}: conjugate of {r} missing",
                    proto.params
                );
            }
        }
    }
}

/// Against the left-half-plane roots of D(s)D(-s) - (1-level) g^2 N(s)N(-s)
/// found by mpmath.polyroots from scipy's zpk (fixture `reflection_roots`).
#[test]
fn flat_loss_roots_match_polynomial_roots() {
    let mut worst: f64 = 0.0;
    for c in &fixtures().reflection_roots {
        let proto = build(params(
            c.family,
            c.order,
            c.ripple_db,
            c.attenuation_db,
            c.variant,
        ));
        let err = set_mismatch(&proto.reflection_roots(c.level), &complex(&c.roots));
        assert!(
            err <= FLAT_LOSS_ROOT_TOL,
            "{:?} {:?} n={} level {}: {err:e}",
            c.family,
            c.variant,
            c.order,
            c.level
        );
        worst = worst.max(err);
    }
    println!("flat-loss roots vs polyroots: worst relative error {worst:.2e}");
}

/// Documented edge of the domain: a negative or NaN level is level 0.
#[test]
fn non_positive_levels_give_the_reflection_zeros() {
    let proto = build(params(
        Family::Elliptic,
        6,
        0.5,
        50.0,
        Variant::ReflectionAtDc,
    ));
    let zeros = proto.reflection_roots(0.0);
    assert_eq!(proto.reflection_roots(-0.5), zeros);
    assert_eq!(proto.reflection_roots(f64::NAN), zeros);
}

// ------------------------------------------------------------ properties

/// Stable poles, jw-axis zeros in pairs matching the ascending
/// transmission zeros, positive gain, for every family, order and variant
/// (scipy's filter-design tests check stability of their prototypes too).
#[test]
fn every_prototype_is_stable_and_well_formed() {
    for proto in all_prototypes() {
        let z = &proto.zpk;
        assert_eq!(z.poles.len(), proto.params.order);
        assert!(
            z.poles.iter().all(|p| p.re < 0.0),
            "{:?}: {:?}",
            proto.params,
            z.poles
        );
        assert_eq!(z.zeros.len(), 2 * proto.transmission_zeros.len());
        assert!(z.zeros.iter().all(|q| q.re == 0.0));
        assert!(proto.transmission_zeros.windows(2).all(|w| w[0] < w[1]));
        assert!(z.gain > 0.0);
    }
}

/// The modified forms push the stopband edge outwards, the type B form by
/// removing the highest zero (Saal 1963, from memory; see
/// src/approx/variant.rs).
#[test]
fn variants_move_the_edge_outwards_and_drop_the_highest_zero() {
    for n in (2..=MAX_ORDER).step_by(2) {
        let make = |v| build(params(Family::Elliptic, n, 0.1, 50.0, v));
        let (a, b, c) = (
            make(Variant::Standard),
            make(Variant::ZeroAtInfinity),
            make(Variant::ReflectionAtDc),
        );
        assert!(
            a.stopband_edge < b.stopband_edge && b.stopband_edge < c.stopband_edge,
            "n={n}"
        );
        assert_eq!(b.transmission_zeros.len() + 1, a.transmission_zeros.len());
        assert_eq!(c.transmission_zeros.len() + 1, a.transmission_zeros.len());
        let dc = c
            .reflection_roots(0.0)
            .iter()
            .filter(|r| r.norm() == 0.0)
            .count();
        assert_eq!(dc, 2, "n={n}: type C has a double reflection zero at DC");
    }
}

// ---------------------------------------------------------------- errors

#[test]
fn bad_params_are_refused_with_the_right_error() {
    let p =
        |family, order, ap, as_, variant| Prototype::new(params(family, order, ap, as_, variant));
    let (b, c, e, std) = (
        Family::Butterworth,
        Family::Chebyshev,
        Family::Elliptic,
        Variant::Standard,
    );
    let order = |family, order, max| Err(ApproxError::OrderOutOfRange { family, order, max });
    assert_eq!(p(b, 0, 1.0, 0.0, std), order(b, 0, MAX_ORDER));
    assert_eq!(
        p(c, MAX_ORDER + 1, 1.0, 0.0, std),
        order(c, MAX_ORDER + 1, MAX_ORDER)
    );
    assert_eq!(
        p(e, MAX_ORDER + 1, 1.0, 40.0, std),
        order(e, MAX_ORDER + 1, MAX_ORDER)
    );
    // to_bits: the carried value must be the one given, NaN included.
    for ripple in [0.0, -1.0, 1e-13, f64::NAN, f64::INFINITY, 301.0] {
        let got = p(c, 3, ripple, 0.0, std);
        assert!(
            matches!(got, Err(ApproxError::RippleOutOfRange { ripple_db }) if ripple_db.to_bits() == ripple.to_bits()),
            "{ripple}: {got:?}"
        );
    }
    for attenuation in [0.5, 1.0, f64::NAN, 301.0] {
        let got = p(e, 3, 1.0, attenuation, std);
        assert!(
            matches!(got, Err(ApproxError::AttenuationOutOfRange { attenuation_db, ripple_db: 1.0 }) if attenuation_db.to_bits() == attenuation.to_bits()),
            "{attenuation}: {got:?}"
        );
    }
    // The attenuation is ignored outside the families with finite zeros.
    assert!(p(c, 3, 1.0, 0.0, std).is_ok());
    assert_eq!(
        p(c, 4, 1.0, 0.0, Variant::ZeroAtInfinity),
        Err(ApproxError::VariantNotForFamily {
            variant: Variant::ZeroAtInfinity,
            family: c,
            accepted: &[Family::Elliptic, Family::InverseChebyshev]
        })
    );
    assert_eq!(
        p(b, 4, 1.0, 0.0, Variant::ReflectionAtDc),
        Err(ApproxError::VariantNotForFamily {
            variant: Variant::ReflectionAtDc,
            family: b,
            accepted: &[Family::Chebyshev, Family::Elliptic]
        })
    );
    for v in [Variant::ZeroAtInfinity, Variant::ReflectionAtDc] {
        assert_eq!(
            p(e, 5, 1.0, 40.0, v),
            Err(ApproxError::VariantNeedsEvenOrder {
                variant: v,
                order: 5
            })
        );
    }
}

#[test]
fn bad_masks_are_refused_with_the_right_error() {
    for ws in [1.0, 0.5, f64::NAN, f64::INFINITY] {
        let got = min_order(Family::Elliptic, ws, 1.0, 40.0);
        assert!(
            matches!(got, Err(ApproxError::StopbandEdgeOutOfRange { .. })),
            "{ws}: {got:?}"
        );
    }
    assert_eq!(
        min_order(Family::Butterworth, 2.0, 3.0, 3.0),
        Err(ApproxError::AttenuationOutOfRange {
            attenuation_db: 3.0,
            ripple_db: 3.0
        })
    );
    assert!(matches!(
        min_order(Family::Chebyshev, 2.0, 0.0, 40.0),
        Err(ApproxError::RippleOutOfRange { .. })
    ));
    let message = min_order(Family::Butterworth, 1.0001, 0.1, 100.0)
        .unwrap_err()
        .to_string();
    assert!(message.contains("largest supported order 25"), "{message}");
}

/// Every message says what would be accepted.
#[test]
fn error_messages_say_what_is_accepted() {
    let errors = [
        Prototype::new(params(Family::Butterworth, 0, 1.0, 0.0, Variant::Standard)),
        Prototype::new(params(Family::Chebyshev, 3, -1.0, 0.0, Variant::Standard)),
        Prototype::new(params(Family::Elliptic, 3, 1.0, 0.5, Variant::Standard)),
        Prototype::new(params(
            Family::Chebyshev,
            4,
            1.0,
            0.0,
            Variant::ZeroAtInfinity,
        )),
    ];
    for e in errors {
        let text = e.unwrap_err().to_string();
        assert!(text.contains("accepted"), "{text}");
    }
}

//! Tests of parts: the preferred-number tables against IEC 60063:2015
//! (tables 1 and 2, from memory), snapping against a brute-force search over
//! decimal literals, and the tolerance models against the moments of
//! their distributions.

use nocoil::parts::{Distribution, PartsError, Series, Tolerance, MAX_TOLERANCE};
use rand_chacha::rand_core::SeedableRng;
use rand_chacha::ChaCha8Rng;

/// The mantissas of a series as integers of its printed digits (2 up to
/// E24, 3 from E48), as the published tables print them.
fn printed(series: Series) -> Vec<u32> {
    let digits = if series.mantissas().len() <= 24 { 1 } else { 2 };
    let scale = 10f64.powi(digits);
    series
        .mantissas()
        .iter()
        .map(|m| (m * scale).round() as u32)
        .collect()
}

/// round(10^(i/N)) to the same printed digits: the formula the tables
/// start from.
fn formula(n: usize) -> Vec<u32> {
    let scale = if n <= 24 { 10.0 } else { 100.0 };
    (0..n)
        .map(|i| (10f64.powf(i as f64 / n as f64) * scale).round() as u32)
        .collect()
}

/// (position, table value, formula value) wherever they differ.
fn departures(series: Series) -> Vec<(usize, u32, u32)> {
    let table = printed(series);
    let n = table.len();
    table
        .into_iter()
        .zip(formula(n))
        .enumerate()
        .filter(|(_, (t, f))| t != f)
        .map(|(i, (t, f))| (i, t, f))
        .collect()
}

#[test]
fn series_tables_have_their_sizes_and_ascend_within_a_decade() {
    for series in Series::ALL {
        let m = series.mantissas();
        assert_eq!(m.len().to_string(), series.to_string()[1..], "{series}");
        assert_eq!(m[0], 1.0, "{series} starts the decade");
        assert!(
            m.windows(2).all(|w| w[0] < w[1]) && *m.last().unwrap() < 10.0,
            "{series}: {m:?}"
        );
    }
}

#[test]
fn e24_departs_from_the_formula_exactly_where_iec_60063_does() {
    // IEC 60063:2015, table 1 (from memory): E24
    // has 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7 and 8.2 where round(10^(i/24))
    // gives 2.6, 2.9, 3.2, 3.5, 3.8, 4.2, 4.6 and 8.3, and nowhere else.
    let got: Vec<(u32, u32)> = departures(Series::E24)
        .into_iter()
        .map(|(_, t, f)| (t, f))
        .collect();
    let expected = vec![
        (27, 26),
        (30, 29),
        (33, 32),
        (36, 35),
        (39, 38),
        (43, 42),
        (47, 46),
        (82, 83),
    ];
    assert_eq!(got, expected);
}

#[test]
fn e48_and_e96_equal_the_formula_and_e192_departs_only_at_9_20() {
    // IEC 60063:2015, table 2 (from memory).
    assert_eq!(departures(Series::E48), vec![]);
    assert_eq!(departures(Series::E96), vec![]);
    assert_eq!(departures(Series::E192), vec![(185, 920, 919)]);
}

#[test]
fn each_series_is_every_second_value_of_the_next_finer_one() {
    // The structure of IEC 60063 (from memory): E3 < E6 < E12 < E24 and
    // E48 < E96 < E192, each taking every second value of the next.
    for pair in [
        (Series::E3, Series::E6),
        (Series::E6, Series::E12),
        (Series::E12, Series::E24),
        (Series::E48, Series::E96),
        (Series::E96, Series::E192),
    ] {
        let finer: Vec<f64> = pair.1.mantissas().into_iter().step_by(2).collect();
        assert_eq!(pair.0.mantissas(), finer, "{} in {}", pair.0, pair.1);
    }
}

#[test]
fn series_names_parse_and_print() {
    for series in Series::ALL {
        let name = series.to_string();
        assert_eq!(name.parse::<Series>(), Ok(series));
        assert_eq!(name.to_lowercase().parse::<Series>(), Ok(series));
    }
    for bad in ["E7", "E 96", "", "96", "E960"] {
        let err = bad.parse::<Series>().unwrap_err();
        assert_eq!(
            err,
            PartsError::UnknownSeries {
                got: bad.to_string()
            }
        );
        let message = err.to_string();
        assert!(
            message.contains("E3, E6, E12, E24, E48, E96, E192"),
            "{message}"
        );
    }
}

/// Every value of a series over the decades 10^-13 to 10^9, parsed from
/// decimal literals ("4.7e-9"): the correctly rounded doubles a person
/// would type, built without the module's arithmetic.
fn literals(series: Series) -> Vec<f64> {
    let digits = if series.mantissas().len() <= 24 { 1 } else { 2 };
    let mut out = Vec::new();
    for exponent in -13..=9 {
        for m in printed(series) {
            let text = format!("{}e{}", m, exponent - digits);
            out.push(text.parse::<f64>().unwrap());
        }
    }
    out
}

/// Values to snap: a log-spaced sweep over 20 decades that lands between,
/// near and on table values.
fn probes() -> Vec<f64> {
    (0..4001)
        .map(|i| 10f64.powf(-12.0 + 20.0 * i as f64 / 4000.0))
        .collect()
}

#[test]
fn snapping_agrees_with_a_brute_force_search_over_literals() {
    for series in Series::ALL {
        let all = literals(series);
        for &v in &probes() {
            let distance = |c: f64| (c / v).ln().abs();
            let nearest = series.nearest(v).unwrap();
            let best = all
                .iter()
                .copied()
                .min_by(|a, b| distance(*a).total_cmp(&distance(*b)))
                .unwrap();
            assert_eq!(nearest, best, "{series} nearest to {v:e}");
            let up = all.iter().copied().find(|&c| c >= v).unwrap();
            let down = all.iter().copied().rev().find(|&c| c <= v).unwrap();
            assert_eq!(series.snap_up(v).unwrap(), up, "{series} up from {v:e}");
            assert_eq!(
                series.snap_down(v).unwrap(),
                down,
                "{series} down from {v:e}"
            );
        }
    }
}

/// `between` lists exactly the literals inside a range, ends included,
/// bit for bit (the brute force above is the reference).
#[test]
fn between_lists_the_literals_in_a_range() {
    for series in Series::ALL {
        let all = literals(series);
        for (low, high) in [
            (1e-10, 1e-6),
            (4.7e-9, 4.7e-9),
            (3.3e2, 9.1e5),
            (2e-12, 2.1e-12),
        ] {
            let want: Vec<f64> = all
                .iter()
                .copied()
                .filter(|v| (low..=high).contains(v))
                .collect();
            let got: Vec<f64> = series.between(low, high).collect();
            assert_eq!(got, want, "{series} from {low:e} to {high:e}");
        }
    }
    assert_eq!(Series::E12.between(-1.0, 1.0).count(), 0);
}

#[test]
fn table_values_snap_to_themselves_bit_for_bit() {
    for series in Series::ALL {
        for &c in &literals(series) {
            assert_eq!(series.nearest(c).unwrap(), c, "{series} {c:e}");
            assert_eq!(series.snap_up(c).unwrap(), c, "{series} {c:e}");
            assert_eq!(series.snap_down(c).unwrap(), c, "{series} {c:e}");
        }
    }
}

#[test]
fn snapping_crosses_decades() {
    // 9.6 is 4 % below 10 and 14 % above 8.2: E12 gives 10.
    assert_eq!(Series::E12.nearest(9.6).unwrap(), 10.0);
    assert_eq!(Series::E12.snap_up(9.6).unwrap(), 10.0);
    assert_eq!(Series::E12.snap_down(9.6).unwrap(), 8.2);
    // Just above a decade's first value, snapping down stays in it.
    assert_eq!(Series::E3.snap_down(1.0001e3).unwrap(), 1e3);
    assert_eq!(Series::E3.snap_up(0.99e-9).unwrap(), 1e-9);
    assert_eq!(Series::E96.nearest(1234.0).unwrap(), 1240.0);
}

#[test]
fn snapping_refuses_values_it_cannot_snap() {
    for bad in [0.0, -4.7e3, f64::NAN, f64::INFINITY, 1e-19, 1e19] {
        let refused = |r: Result<f64, PartsError>| matches!(r, Err(PartsError::BadValue { value }) if value.to_bits() == bad.to_bits());
        assert!(refused(Series::E24.nearest(bad)), "{bad}");
        assert!(refused(Series::E24.snap_up(bad)), "{bad}");
        assert!(refused(Series::E24.snap_down(bad)), "{bad}");
        let message = PartsError::BadValue { value: bad }.to_string();
        assert!(message.contains("expected a finite value"), "{message}");
    }
}

#[test]
fn tolerances_outside_0_to_50_percent_are_refused() {
    for good in [0.0, 0.01, MAX_TOLERANCE] {
        let t = Tolerance::new(good, Distribution::Uniform).unwrap();
        assert_eq!(t.relative(), good);
        assert_eq!(t.distribution(), Distribution::Uniform);
    }
    for bad in [-0.01, 0.500001, 1.0, f64::NAN, f64::INFINITY] {
        let err = Tolerance::new(bad, Distribution::Gaussian).unwrap_err();
        assert!(
            matches!(err, PartsError::BadTolerance { relative } if relative.to_bits() == bad.to_bits())
        );
        assert!(err.to_string().contains("from 0 to 0.5"), "{err}");
    }
}

/// Sample mean, variance, fourth central moment and the fraction inside
/// +- `inner`, of z = (factor - 1) / tolerance.
fn moments(tolerance: Tolerance, draws: usize, inner: f64) -> (f64, f64, f64, f64) {
    let mut rng = ChaCha8Rng::seed_from_u64(20240607);
    let z: Vec<f64> = (0..draws)
        .map(|_| (tolerance.draw(&mut rng) - 1.0) / tolerance.relative())
        .collect();
    assert!(
        z.iter().all(|z| z.abs() <= 1.0),
        "every draw within its tolerance"
    );
    let n = draws as f64;
    let mean = z.iter().sum::<f64>() / n;
    let var = z.iter().map(|z| (z - mean).powi(2)).sum::<f64>() / n;
    let m4 = z.iter().map(|z| (z - mean).powi(4)).sum::<f64>() / n;
    let inside = z.iter().filter(|z| z.abs() < inner).count() as f64 / n;
    (mean, var, m4, inside)
}

/// Draws per moment test: enough for standard errors near 1e-3.
const DRAWS: usize = 400_000;

/// Allowed distance of a sample statistic from its exact value, in
/// standard errors: a correct sampler exceeds 5 with probability 6e-7.
const STANDARD_ERRORS: f64 = 5.0;

fn assert_statistic(name: &str, got: f64, exact: f64, standard_error: f64) {
    assert!(
        (got - exact).abs() <= STANDARD_ERRORS * standard_error,
        "{name}: got {got}, exact {exact}, standard error {standard_error:e}"
    );
}

#[test]
fn uniform_draws_have_the_moments_of_a_uniform_distribution() {
    // z uniform on [-1, 1]: mean 0, variance 1/3, and |z| < 1/2 half of
    // the time (closed forms).
    let t = Tolerance::new(0.05, Distribution::Uniform).unwrap();
    let (mean, var, m4, inside) = moments(t, DRAWS, 0.5);
    let n = DRAWS as f64;
    assert_statistic("mean", mean, 0.0, (var / n).sqrt());
    assert_statistic("variance", var, 1.0 / 3.0, ((m4 - var * var) / n).sqrt());
    assert_statistic("P(|z| < 1/2)", inside, 0.5, (0.25 / n).sqrt());
}

#[test]
fn gaussian_draws_have_the_moments_of_a_normal_truncated_at_3_sigma() {
    // z = n / 3 with n standard normal truncated to |n| <= 3. Normal
    // values from Abramowitz and Stegun (1964), table 26.1: Phi(1) =
    // 0.8413447461, Phi(3) = 0.9986501020, phi(3) = 0.0044318484. The
    // truncated variance is 1 - 2 b phi(b) / (2 Phi(b) - 1) at b = 3
    // (Johnson, Kotz and Balakrishnan, Continuous Univariate
    // Distributions, vol. 1, 2nd ed., 1994, ch. 13, from memory), and
    // P(|n| < 1 | |n| <= 3) = (2 Phi(1) - 1) / (2 Phi(3) - 1).
    let (phi1, phi3, density3) = (0.8413447461, 0.9986501020, 0.0044318484);
    let mass = 2.0 * phi3 - 1.0;
    let exact_var = (1.0 - 2.0 * 3.0 * density3 / mass) / 9.0;
    let exact_inside = (2.0 * phi1 - 1.0) / mass;
    let t = Tolerance::new(0.01, Distribution::Gaussian).unwrap();
    let (mean, var, m4, inside) = moments(t, DRAWS, 1.0 / 3.0);
    let n = DRAWS as f64;
    assert_statistic("mean", mean, 0.0, (var / n).sqrt());
    assert_statistic("variance", var, exact_var, ((m4 - var * var) / n).sqrt());
    assert_statistic(
        "P(|n| < 1)",
        inside,
        exact_inside,
        (exact_inside * (1.0 - exact_inside) / n).sqrt(),
    );
}

#[test]
fn draws_repeat_for_a_seed_and_a_zero_tolerance_draws_exactly_one() {
    let t = Tolerance::new(0.2, Distribution::Gaussian).unwrap();
    let run = |seed: u64| {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        (0..100).map(|_| t.draw(&mut rng)).collect::<Vec<f64>>()
    };
    assert_eq!(run(7), run(7));
    assert_ne!(run(7), run(8));
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    for distribution in [Distribution::Uniform, Distribution::Gaussian] {
        let zero = Tolerance::new(0.0, distribution).unwrap();
        assert!((0..100).all(|_| zero.draw(&mut rng) == 1.0));
    }
}

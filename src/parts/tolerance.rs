//! Tolerance models of real parts: a relative tolerance and the spread of
//! the parts within it, drawn from a caller's seeded generator so that a
//! Monte Carlo run is reproducible.
//!
//! Gaussian parts put 3 sigma at the tolerance (common practice) and
//! are truncated there: a maker tests its parts against the
//! tolerance it prints and rejects those outside, so a 1 % resistor is
//! never 1.2 % off. Truncating at 3 sigma drops 0.27 % of the bell, which
//! leaves the standard deviation at 0.987 sigma (the tests check it).
//! Uniform parts spread evenly over +- tolerance, the pessimistic model
//! for parts screened out of a wider production spread.

use rand_chacha::rand_core::Rng;

use super::PartsError;

/// Largest relative tolerance accepted: 50 %. Looser parts are not sold,
/// and beyond it a draw could come close to a zero value.
pub const MAX_TOLERANCE: f64 = 0.5;

/// Standard deviations per tolerance for Gaussian parts (3 sigma =
/// tolerance, common practice), which is also the truncation point.
const SIGMAS_PER_TOLERANCE: f64 = 3.0;

/// 2^-53: turns the top 53 bits of a random u64 into a uniform double in
/// [0, 1) with every value a multiple of 2^-53.
const UNIT: f64 = 1.0 / (1u64 << 53) as f64;

/// How parts spread within their tolerance (`[parts] distribution` of a
/// design file).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Distribution {
    /// Evenly over +- tolerance.
    Uniform,
    /// Gaussian with 3 sigma = tolerance, truncated at +- tolerance.
    Gaussian,
}

impl std::fmt::Display for Distribution {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Distribution::Uniform => "uniform",
            Distribution::Gaussian => "Gaussian",
        })
    }
}

/// A relative tolerance (0.01 is 1 %) and how parts spread within it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tolerance {
    relative: f64,
    distribution: Distribution,
}

impl Tolerance {
    /// A tolerance of `relative` (a fraction from 0 to
    /// [`MAX_TOLERANCE`]).
    pub fn new(relative: f64, distribution: Distribution) -> Result<Tolerance, PartsError> {
        if (0.0..=MAX_TOLERANCE).contains(&relative) {
            Ok(Tolerance {
                relative,
                distribution,
            })
        } else {
            Err(PartsError::BadTolerance { relative })
        }
    }

    /// The relative tolerance (a fraction).
    pub fn relative(&self) -> f64 {
        self.relative
    }

    /// The spread within it.
    pub fn distribution(&self) -> Distribution {
        self.distribution
    }

    /// One part's value over its nominal value: 1 + tolerance x z with z
    /// in [-1, 1] drawn from the distribution; exactly 1 for a zero
    /// tolerance.
    pub fn draw<R: Rng + ?Sized>(&self, rng: &mut R) -> f64 {
        let z = match self.distribution {
            Distribution::Uniform => 2.0 * unit(rng) - 1.0,
            Distribution::Gaussian => truncated_normal(rng) / SIGMAS_PER_TOLERANCE,
        };
        1.0 + self.relative * z
    }
}

/// A uniform double in [0, 1), fixed by the generator's output alone.
fn unit<R: Rng + ?Sized>(rng: &mut R) -> f64 {
    (rng.next_u64() >> 11) as f64 * UNIT
}

/// A standard normal deviate within +- [`SIGMAS_PER_TOLERANCE`], by the
/// Box-Muller transform (G. E. P. Box and M. E. Muller, "A note on the
/// generation of random normal deviates", Ann. Math. Statist. 29, 1958,
/// p. 610) with rejection of the tails. Written out rather than taken
/// from a library so that the deviates never change with a dependency's
/// version; about one draw in 370 is redrawn.
fn truncated_normal<R: Rng + ?Sized>(rng: &mut R) -> f64 {
    loop {
        // 1 - unit is in (0, 1], so the logarithm is finite.
        let radius = (-2.0 * (1.0 - unit(rng)).ln()).sqrt();
        let z = radius * (std::f64::consts::TAU * unit(rng)).cos();
        if z.abs() <= SIGMAS_PER_TOLERANCE {
            return z;
        }
    }
}

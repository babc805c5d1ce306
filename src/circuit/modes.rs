//! A transfer as a sum of its modes, for time responses: the natural
//! frequencies p_i with the residues r_i of H(s) = V(out)/V(inp) there,
//! and the direct part D = H(infinity), so that
//! H(s) = D + sum r_i / (s - p_i) and the response to a unit step is
//! y(t) = D + sum r_i (e^(p_i t) - 1) / p_i for t > 0 (partial fractions
//! and the Laplace transform, common practice).
//!
//! The residue of a simple pole of the pencil G + sC comes from its right
//! and left null vectors x and w: near p, (G + sC)^-1 ~ x w^T / (w^T C x
//! (s - p)), so r = (e_out^T x)(w^T b) / (w^T C x) / V(inp) (the formula
//! behind the dominant-pole algorithm of Martins, Lima and Pinto,
//! "Computing dominant poles of power system transfer functions", IEEE
//! Trans. Power Systems 11, 1996, from memory). x and w come from two
//! steps of inverse iteration at a point [`NEAR_POLE`] away from the
//! pole, which leaves them within about that fraction of the null
//! vectors squared.
//!
//! The expansion is checked against the solved transfer before it is
//! used: a pole that is not simple (a Jordan block, where the formula
//! does not hold) or a lost pole shows there, and the expansion is
//! refused rather than trusted ([`MODES_CHECK`]).

use num_complex::Complex64;

use super::lu::Lu;
use super::{AcSystem, CircuitError};

/// The relative distance from a pole at which its null vectors are found
/// by inverse iteration: far enough that the LU accepts the matrix (it
/// rejects a condition number above about 4e12), near enough that two
/// steps leave the vectors within 1e-16 of the null directions, relative
/// to the distance to the next pole.
const NEAR_POLE: f64 = 1e-8;

/// Largest relative difference between the expansion and the solved
/// transfer at the check points (relative to the largest |H| there)
/// that the expansion may show. Measured on the three builds of every
/// example: at most 1.9e-10 (tests/step.rs, `modes_reproduce_the_transfer`,
/// the mains notch's active builds); a lost pole or one counted twice
/// showed as 0.88 of the passband level while this check was written.
pub const MODES_CHECK: f64 = 1e-7;

/// Largest Rayleigh correction of a true pole, relative to it (see
/// `AcSystem::pole_and_residue`): inverse iteration [`NEAR_POLE`] away
/// leaves a true pole's correction near NEAR_POLE^2; a root that is not a
/// pole moves by its own size.
const GENUINE_POLE: f64 = 1e-6;

/// Check points of the expansion, log-spaced over the poles' span.
const CHECK_POINTS: usize = 24;

/// Poles nearer the origin than this fraction of the largest are charge
/// modes or as slow as one (see `active::stability`): their residue is
/// still found, and their term kept, through (e^(pt) - 1)/p, which tends
/// to t.
const TINY_POLE: f64 = 1e-12;

/// A transfer by its modes; see the module documentation.
#[derive(Debug, Clone, PartialEq)]
pub struct Modes {
    /// D = H(infinity).
    pub direct: f64,
    /// The poles, rad/s: real ones and one of each conjugate pair (the
    /// one with Im > 0), whose conjugate's term is the conjugate.
    pub poles: Vec<Complex64>,
    /// The residue of H at each pole.
    pub residues: Vec<Complex64>,
}

/// (e^z - 1) / z, accurate near z = 0.
fn phi(z: Complex64) -> Complex64 {
    if z.norm() < 1e-5 {
        1.0 + z / 2.0 + z * z / 6.0
    } else {
        (z.exp() - 1.0) / z
    }
}

impl Modes {
    /// The terms of a conjugate pair count twice (as 2 Re).
    fn weight(p: Complex64) -> f64 {
        if p.im > 0.0 {
            2.0
        } else {
            1.0
        }
    }

    /// The response to a unit step at `t_s` >= 0 seconds (after the
    /// step; the direct part at t = 0).
    pub fn step_at(&self, t_s: f64) -> f64 {
        self.direct
            + self
                .poles
                .iter()
                .zip(&self.residues)
                .map(|(&p, &r)| Self::weight(p) * (r * t_s * phi(p * t_s)).re)
                .sum::<f64>()
    }

    /// The step response's final value, H(0) = D - sum r_i / p_i (a pole
    /// at the origin, whose residue is zero, adds nothing).
    pub fn final_value(&self) -> f64 {
        self.direct
            - self
                .poles
                .iter()
                .zip(&self.residues)
                .filter(|(p, _)| p.norm() > 0.0)
                .map(|(&p, &r)| Self::weight(p) * (r / p).re)
                .sum::<f64>()
    }

    /// A bound on |y(t) - y(infinity)| from `t_s` on: sum |r_i / p_i|
    /// e^(Re p_i t) (each term decays at least that fast).
    pub fn tail_bound(&self, t_s: f64) -> f64 {
        self.poles
            .iter()
            .zip(&self.residues)
            .filter(|(p, _)| p.norm() > 0.0)
            .map(|(&p, &r)| Self::weight(p) * (r / p).norm() * (p.re * t_s).exp())
            .sum()
    }

    /// The expansion's H(s).
    pub fn transfer_at(&self, s: Complex64) -> Complex64 {
        let mut h = Complex64::new(self.direct, 0.0);
        for (&p, &r) in self.poles.iter().zip(&self.residues) {
            h += r / (s - p);
            if p.im > 0.0 {
                h += r.conj() / (s - p.conj());
            }
        }
        h
    }
}

impl AcSystem {
    /// V(node) of the solution at complex `s` with the circuit's own
    /// excitation, by `lu`.
    fn voltage_at(
        &self,
        lu: &mut Lu,
        s: Complex64,
        node: usize,
    ) -> Result<Complex64, CircuitError> {
        if !lu.factor(self.g(), self.c(), s) {
            return Err(CircuitError::Singular {
                freq_hz: s.im / std::f64::consts::TAU,
            });
        }
        let mut x: Vec<Complex64> = self.b().iter().map(|&b| Complex64::new(b, 0.0)).collect();
        lu.solve(&mut x);
        Ok(self
            .unknown_of_node(node)
            .map_or(Complex64::new(0.0, 0.0), |i| x[i]))
    }

    /// The pole `p` refined, with the residue of V(out) (with the
    /// circuit's own excitation) there; see the module documentation.
    /// `None` for a root that is not a pole of the pencil: a blurred
    /// infinite eigenvalue (an inductor cutset or a capacitor loop makes
    /// the zero eigenvalue of the shift-and-invert matrix a Jordan block,
    /// which rounding splits into a pair of large roots, one in the right
    /// half plane: measured at +-3.6e10 rad/s on the elliptic example's
    /// passive ideal), or a charge mode at the origin. Either shows as a
    /// Rayleigh correction w^T (G + pC) x / (w^T C x) far above
    /// [`GENUINE_POLE`] of the pole, where a true pole's is of the order
    /// of the inverse iteration's error.
    fn pole_and_residue(
        &self,
        lu: &mut Lu,
        p: Complex64,
        scale: f64,
        out: usize,
    ) -> Result<Option<(Complex64, Complex64)>, CircuitError> {
        let n = self.g().nrows();
        let size = p.norm().max(TINY_POLE * scale);
        let near = p + NEAR_POLE * size;
        if !lu.factor(self.g(), self.c(), near) {
            return Err(CircuitError::NoConvergence {
                what: "step response: a pole's null vectors",
            });
        }
        let (g, c) = (self.g(), self.c());
        let apply =
            |m: &nalgebra::DMatrix<f64>, v: &[Complex64], transposed: bool| -> Vec<Complex64> {
                (0..n)
                    .map(|i| {
                        (0..n)
                            .map(|j| if transposed { m[(j, i)] } else { m[(i, j)] } * v[j])
                            .sum()
                    })
                    .collect()
            };
        let normalize = |v: &mut Vec<Complex64>| {
            let size = v.iter().map(|z| z.norm_sqr()).sum::<f64>().sqrt();
            v.iter_mut().for_each(|z| *z /= size);
        };
        // A start with every component: inverse iteration needs one that
        // has some of the null vector.
        let start: Vec<Complex64> = (0..n)
            .map(|i| Complex64::new(1.0 + (i as f64 * 0.618_033_988_75).fract(), 0.3))
            .collect();
        // (G + near C)^-1 C multiplies the null direction by
        // 1 / (near - p) and the others by at most the inverse distance
        // to their poles: two steps, from a start, then from C x.
        let (mut x, mut w) = (start.clone(), start);
        for step in 0..2 {
            if step > 0 {
                x = apply(c, &x, false);
                w = apply(c, &w, true);
            }
            lu.solve(&mut x);
            normalize(&mut x);
            lu.solve_transposed(&mut w);
            normalize(&mut w);
        }
        let dot = |a: &[Complex64], b: &[Complex64]| -> Complex64 {
            a.iter().zip(b).map(|(a, b)| a * b).sum()
        };
        let (gx, cx) = (apply(g, &x, false), apply(c, &x, false));
        let wcx = dot(&w, &cx);
        let correction = (dot(&w, &gx) + p * wcx) / wcx;
        // A NaN correction is no pole either.
        if correction.norm().is_nan() || correction.norm() > GENUINE_POLE * size {
            return Ok(None);
        }
        let wb: Complex64 = w.iter().zip(self.b().iter()).map(|(a, &b)| a * b).sum();
        let xout = self
            .unknown_of_node(out)
            .map_or(Complex64::new(0.0, 0.0), |i| x[i]);
        let (pole, residue) = (p - correction, xout * wb / wcx);
        // A real root stays real (its conjugate is itself): rounding would
        // give it an imaginary part that counts it as a pair.
        Ok(Some(if p.im == 0.0 {
            (
                Complex64::new(pole.re, 0.0),
                Complex64::new(residue.re, 0.0),
            )
        } else {
            (pole, residue)
        }))
    }

    /// The modes of V(out)/V(inp): the natural frequencies, the residues
    /// of the transfer there and its direct part, checked against the
    /// solved transfer (see the module documentation). V(inp) must not
    /// depend on s (a source drives it).
    pub fn modes(&self, out: usize, inp: usize) -> Result<Modes, CircuitError> {
        let all = self.natural_frequencies()?;
        let n = self.g().nrows();
        let mut lu = Lu::new(n);
        let scale = all.iter().map(|p| p.norm()).fold(0.0, f64::max);
        let poles: Vec<Complex64> = all.into_iter().filter(|p| p.im >= 0.0).collect();
        let finite: Vec<f64> = poles
            .iter()
            .map(|p| p.norm())
            .filter(|&m| m > TINY_POLE * scale)
            .collect();
        let lowest = finite.iter().copied().fold(f64::INFINITY, f64::min);
        let (lowest, highest) = if finite.is_empty() {
            (1.0, 1.0)
        } else {
            (lowest, scale)
        };
        // A point of the imaginary axis between the poles for V(inp) and
        // the direct part.
        let mid = Complex64::new(0.0, (lowest * highest).sqrt());
        let vin = self.voltage_at(&mut lu, mid, inp)?;
        if vin == Complex64::new(0.0, 0.0) {
            return Err(CircuitError::ZeroVoltage {
                node: inp,
                freq_hz: mid.im / std::f64::consts::TAU,
            });
        }
        let mut modes = Modes {
            direct: 0.0,
            poles: Vec::new(),
            residues: Vec::new(),
        };
        for p in poles {
            if let Some((pole, residue)) = self.pole_and_residue(&mut lu, p, scale, out)? {
                modes.poles.push(pole);
                modes.residues.push(residue / vin);
            }
        }
        let h_mid = self.voltage_at(&mut lu, mid, out)? / vin;
        modes.direct = (h_mid - modes.transfer_at(mid)).re;
        let span = (highest / lowest).max(1.0);
        let mut worst = 0.0f64;
        let mut largest = 0.0f64;
        for k in 0..CHECK_POINTS {
            let w = lowest * span.powf(k as f64 / (CHECK_POINTS - 1) as f64);
            let s = Complex64::new(0.0, w);
            let h = self.voltage_at(&mut lu, s, out)? / self.voltage_at(&mut lu, s, inp)?;
            worst = worst.max((h - modes.transfer_at(s)).norm());
            largest = largest.max(h.norm());
        }
        if worst.is_nan() || worst > MODES_CHECK * largest {
            return Err(CircuitError::NoConvergence {
                what: "step response: the poles and residues do not reproduce the transfer",
            });
        }
        Ok(modes)
    }
}

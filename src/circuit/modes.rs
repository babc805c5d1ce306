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
//! Roots too close to separate this way form a cluster, taken as one
//! term with a second-order part by a contour integral ([`CLUSTER`]).
//! The expansion is checked against the solved transfer before it is
//! used; where it misses, its residues are refitted by least squares on
//! the solved transfer, and if it still misses (a lost pole) it is
//! refused rather than trusted ([`MODES_CHECK`]).

use num_complex::Complex64;

use super::lu::Lu;
use super::{AcSystem, CircuitError, RESONANCE_STEP};

/// The relative distance from a pole at which its null vectors are found
/// by inverse iteration: far enough that the LU accepts the matrix (it
/// rejects a condition number above about 4e12), near enough that two
/// steps leave the vectors within 1e-16 of the null directions, relative
/// to the distance to the next pole.
const NEAR_POLE: f64 = 1e-8;

/// Largest relative difference between the expansion and the solved
/// transfer at the check points (relative to the largest |H| there)
/// that the expansion may show. Measured on the three builds of every
/// example: at most 1.5e-11 (tests/step.rs, `modes_reproduce_the_transfer`);
/// a 25th-order Butterworth bandpass's passive ideal showed 2.3e-5 before
/// its residues were refitted and passes after; a lost pole or one counted
/// twice showed as 0.88 of the passband level while this check was
/// written.
pub const MODES_CHECK: f64 = 1e-7;

/// Largest mismatch (as for [`MODES_CHECK`]) of an expansion still used
/// after its residues were refitted: the step figures then leave out
/// every settling band finer than ten times it (see
/// `analysis::step_figures`). Measured: about one design in 3,000 of
/// the generative test (an 18th-order Chebyshev bandpass's active
/// builds: 1.5e-3 from the null vectors, 1.0e-5 refitted) needs this.
pub const MODES_USABLE: f64 = 1e-3;

/// Largest Rayleigh correction of a true pole, relative to it (see
/// `AcSystem::pole_and_residue`): inverse iteration [`NEAR_POLE`] away
/// leaves a true pole's correction near NEAR_POLE^2; a root that is not a
/// pole moves by its own size.
const GENUINE_POLE: f64 = 1e-6;

/// Roots closer than this fraction of their size form a cluster, taken
/// as one term by a contour integral (`AcSystem::cluster_term`): inverse
/// iteration [`NEAR_POLE`] away from a pole leaves its null vectors
/// within (NEAR_POLE / distance)^2 of a neighbour's, 1e-6 at this
/// distance. Identical op-amps in alike stages give such clusters (six
/// poles within 1e-7 of each other on an 8th-order inverse Chebyshev
/// bandstop's active build, found by the generative test), as do the
/// DC-path and damping resistors' slow poles.
pub const CLUSTER: f64 = 1e-5;

/// Points of a cluster's contour integral: the trapezoidal rule on a
/// circle errs as (radius / distance to the nearest singularity
/// outside)^N, at most 2^-32 here.
const CONTOUR_POINTS: usize = 32;

/// Points per term of the least-squares refit of the residues, spread
/// over two decades more than the poles span: four times the real
/// unknowns, so the fit is well overdetermined.
const REFIT_POINTS_PER_TERM: usize = 8;

/// Check points of the expansion, log-spaced over the poles' span.
const CHECK_POINTS: usize = 24;

/// Poles nearer the origin than this fraction of the largest are charge
/// modes or as slow as one (see `active::stability`): their residue is
/// still found, and their term kept, through (e^(pt) - 1)/p, which tends
/// to t.
const TINY_POLE: f64 = 1e-12;

/// One term of the expansion: r / (s - p) + a2 / (s - p)^2 (a2 is zero
/// but for a cluster of poles too close to separate, see
/// [`CLUSTER`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Mode {
    /// The pole, rad/s: real, or the one of a conjugate pair with
    /// Im > 0, whose conjugate's term is the conjugate.
    pub pole: Complex64,
    /// The residue r.
    pub residue: Complex64,
    /// The coefficient a2 of 1 / (s - p)^2.
    pub second: Complex64,
}

/// A transfer by its modes; see the module documentation.
#[derive(Debug, Clone, PartialEq)]
pub struct Modes {
    /// D = H(infinity).
    pub direct: f64,
    /// The terms.
    pub terms: Vec<Mode>,
    /// How closely the expansion reproduces the solved transfer: the
    /// largest difference at the check points, relative to the largest
    /// |H| there (at most [`MODES_USABLE`]).
    pub accuracy: f64,
}

/// (e^z - 1) / z, accurate near z = 0.
fn phi1(z: Complex64) -> Complex64 {
    if z.norm() < 1e-5 {
        1.0 + z / 2.0 + z * z / 6.0
    } else {
        (z.exp() - 1.0) / z
    }
}

/// (e^z - 1 - z) / z^2, accurate near z = 0.
fn phi2(z: Complex64) -> Complex64 {
    if z.norm() < 1e-3 {
        0.5 + z / 6.0 + z * z / 24.0
    } else {
        (z.exp() - 1.0 - z) / (z * z)
    }
}

/// (e^z (z - 1) + 1) / z^2, accurate near z = 0.
fn psi(z: Complex64) -> Complex64 {
    if z.norm() < 1e-3 {
        0.5 + z / 3.0 + z * z / 8.0
    } else {
        (z.exp() * (z - 1.0) + 1.0) / (z * z)
    }
}

/// (z + z e^z - 2 (e^z - 1)) / z^3, accurate near z = 0.
fn chi(z: Complex64) -> Complex64 {
    if z.norm() < 1e-2 {
        1.0 / 6.0 + z / 12.0 + z * z / 40.0
    } else {
        (z + z * z.exp() - 2.0 * (z.exp() - 1.0)) / (z * z * z)
    }
}

impl Mode {
    /// A conjugate pair's terms count twice (as 2 Re).
    fn weight(&self) -> f64 {
        if self.pole.im > 0.0 {
            2.0
        } else {
            1.0
        }
    }
}

impl Modes {
    /// Sum over the terms of `term`'s real part, conjugates included.
    fn sum(&self, term: impl Fn(&Mode) -> Complex64) -> f64 {
        self.terms.iter().map(|m| m.weight() * term(m).re).sum()
    }

    /// The response to a unit step at `t_s` >= 0 seconds (after the
    /// step; the direct part at t = 0): D + sum r (e^(pt) - 1) / p +
    /// a2 (e^(pt) (pt - 1) + 1) / p^2.
    pub fn step_at(&self, t_s: f64) -> f64 {
        self.direct
            + self.sum(|m| {
                let z = m.pole * t_s;
                m.residue * t_s * phi1(z) + m.second * t_s * t_s * psi(z)
            })
    }

    /// The step response at t = k `dt_s` for k = 0 .. `count`, each
    /// term's e^(p t) carried from sample to sample by one complex
    /// multiplication by e^(p dt) (rounding grows by about one unit per
    /// sample, 2e-12 over 20,000 of them): [`Modes::step_at`] at many
    /// times for the price of one exponential per term.
    pub fn step_samples(&self, dt_s: f64, count: usize) -> Vec<f64> {
        let mut out = vec![self.direct; count];
        for m in &self.terms {
            let p = m.pole;
            if p.norm() == 0.0 {
                continue;
            }
            let step = (p * dt_s).exp();
            let mut e = Complex64::new(1.0, 0.0);
            for (k, y) in out.iter_mut().enumerate() {
                let t = k as f64 * dt_s;
                let term =
                    m.residue * (e - 1.0) / p + m.second * (e * (p * t - 1.0) + 1.0) / (p * p);
                *y += m.weight() * term.re;
                e *= step;
            }
        }
        out
    }

    /// The integral of the step response from 0 to `t_s`: the response
    /// to a unit ramp (a step over a rise time h is the difference of two
    /// of these over h).
    pub fn step_integral(&self, t_s: f64) -> f64 {
        self.direct * t_s
            + self.sum(|m| {
                let z = m.pole * t_s;
                m.residue * t_s * t_s * phi2(z) + m.second * t_s.powi(3) * chi(z)
            })
    }

    /// The step response's final value, H(0) = D - sum r / p + a2 / p^2
    /// (a pole at the origin, whose terms are zero, adds nothing).
    pub fn final_value(&self) -> f64 {
        self.direct
            + self.sum(|m| match m.pole.norm() > 0.0 {
                true => -m.residue / m.pole + m.second / (m.pole * m.pole),
                false => Complex64::new(0.0, 0.0),
            })
    }

    /// A bound on |y(t) - y(infinity)| from `t_s` on: each term's size
    /// times e^(Re p t).
    pub fn tail_bound(&self, t_s: f64) -> f64 {
        self.terms
            .iter()
            .filter(|m| m.pole.norm() > 0.0)
            .map(|m| {
                let p = m.pole.norm();
                let size = m.residue.norm() / p + m.second.norm() * (1.0 / (p * p) + t_s / p);
                m.weight() * size * (m.pole.re * t_s).exp()
            })
            .sum()
    }

    /// The expansion's H(s).
    pub fn transfer_at(&self, s: Complex64) -> Complex64 {
        let mut h = Complex64::new(self.direct, 0.0);
        for m in &self.terms {
            let term =
                |p: Complex64, r: Complex64, a2: Complex64| r / (s - p) + a2 / ((s - p) * (s - p));
            h += term(m.pole, m.residue, m.second);
            if m.pole.im > 0.0 {
                h += term(m.pole.conj(), m.residue.conj(), m.second.conj());
            }
        }
        h
    }
}

impl AcSystem {
    /// (V(out), V(inp)) of the solution with the circuit's own
    /// excitation at complex `s`, or where that is singular (a lossless
    /// resonance of a passive ideal on the imaginary axis) a step of
    /// [`RESONANCE_STEP`] beside it: the point used comes back first.
    fn voltages_near(
        &self,
        lu: &mut Lu,
        s: Complex64,
        out: usize,
        inp: usize,
    ) -> Result<(Complex64, Complex64, Complex64), CircuitError> {
        let near = s * (1.0 + RESONANCE_STEP);
        let used = if lu.factor(self.g(), self.c(), s) {
            s
        } else if lu.factor(self.g(), self.c(), near) {
            near
        } else {
            return Err(CircuitError::Singular {
                freq_hz: s.im / std::f64::consts::TAU,
            });
        };
        let mut x: Vec<Complex64> = self.b().iter().map(|&b| Complex64::new(b, 0.0)).collect();
        lu.solve(&mut x);
        let v = |node: usize| {
            self.unknown_of_node(node)
                .map_or(Complex64::new(0.0, 0.0), |i| x[i])
        };
        Ok((used, v(out), v(inp)))
    }

    /// The term of a cluster of roots too close to separate (see
    /// [`CLUSTER`]): the first two Laurent coefficients of V(out) about
    /// their centre c, a1 = (1 / 2 pi i) contour of V(out) ds and a2 =
    /// (1 / 2 pi i) contour of V(out) (s - c) ds, on a circle that holds
    /// them and no other root, by the trapezoidal rule on
    /// [`CONTOUR_POINTS`] points (exponentially accurate for a function
    /// analytic on an annulus, common practice). A cluster on the real
    /// axis, or straddling it, is centred on it and counts once.
    fn cluster_term(
        &self,
        lu: &mut Lu,
        members: &[Complex64],
        all: &[Complex64],
        out: usize,
    ) -> Result<Mode, CircuitError> {
        let mut c = members.iter().sum::<Complex64>() / members.len() as f64;
        let spread = members.iter().map(|p| (p - c).norm()).fold(0.0, f64::max);
        let real = members.iter().any(|p| p.im == 0.0) || c.im <= 2.0 * spread;
        if real {
            c.im = 0.0;
        }
        let spread = members.iter().map(|p| (p - c).norm()).fold(0.0, f64::max);
        // Every other root, conjugates included, stays outside.
        let outside = all
            .iter()
            .flat_map(|p| [*p, p.conj()])
            .filter(|p| !members.iter().any(|m| m == p || m.conj() == *p))
            .map(|p| (p - c).norm())
            .fold(f64::INFINITY, f64::min);
        let radius = (2.0 * spread).max(CLUSTER * c.norm()).min(0.5 * outside);
        let (mut a1, mut a2) = (Complex64::new(0.0, 0.0), Complex64::new(0.0, 0.0));
        for k in 0..CONTOUR_POINTS {
            let theta = std::f64::consts::TAU * (k as f64 + 0.5) / CONTOUR_POINTS as f64;
            let step = Complex64::from_polar(radius, theta);
            let (used, vout, _) = self.voltages_near(lu, c + step, out, out)?;
            let d = used - c;
            a1 += vout * d;
            a2 += vout * d * d;
        }
        a1 /= CONTOUR_POINTS as f64;
        a2 /= CONTOUR_POINTS as f64;
        Ok(match real {
            true => Mode {
                pole: c,
                residue: Complex64::new(a1.re, 0.0),
                second: Complex64::new(a2.re, 0.0),
            },
            false => Mode {
                pole: c,
                residue: a1,
                second: a2,
            },
        })
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
        // Where the matrix is too nearly singular for the LU at the
        // first offset, farther ones (the null vectors then come out
        // less pure, which the check of the expansion catches).
        // The LU keeps the factors of the first offset it accepts.
        let factored = [1.0, 1e2, 1e4]
            .iter()
            .any(|k| lu.factor(self.g(), self.c(), p + k * NEAR_POLE * size));
        if !factored {
            return Ok(None);
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

    /// The modes of V(out)/V(inp) from the circuit's natural frequencies
    /// `roots` (rad/s; conjugates and roots that are not poles of the
    /// transfer are set aside): the residues of the transfer there and
    /// its direct part, checked against the solved transfer (see the
    /// module documentation). V(inp) must not depend on s (a source
    /// drives it).
    pub fn modes(
        &self,
        roots: &[Complex64],
        out: usize,
        inp: usize,
    ) -> Result<Modes, CircuitError> {
        let n = self.g().nrows();
        let mut lu = Lu::new(n);
        let scale = roots.iter().map(|p| p.norm()).fold(0.0, f64::max);
        let upper: Vec<Complex64> = roots.iter().copied().filter(|p| p.im >= 0.0).collect();
        let mut modes = Modes {
            direct: 0.0,
            terms: Vec::new(),
            accuracy: 0.0,
        };
        // Charge modes (roots at the origin, within rounding) have no
        // residue: no source excites them and no output sees them (see
        // `active::stability`); the charge of a floating group never
        // changes.
        let moving: Vec<Complex64> = upper
            .iter()
            .copied()
            .filter(|p| p.norm() > TINY_POLE * scale)
            .collect();
        for group in clusters(&moving, scale) {
            let term = match group.as_slice() {
                &[p] => self
                    .pole_and_residue(&mut lu, p, scale, out)?
                    .map(|(pole, residue)| Mode {
                        pole,
                        residue,
                        second: Complex64::new(0.0, 0.0),
                    }),
                // A contour that cannot be solved leaves the cluster out,
                // for the check of the expansion to judge.
                members => self.cluster_term(&mut lu, members, &moving, out).ok(),
            };
            modes.terms.extend(term);
        }
        // The check spans the poles kept (a blurred infinite root, set
        // aside, may lie 1e8 times above them, where the solved transfer
        // itself has lost digits).
        let finite: Vec<f64> = modes
            .terms
            .iter()
            .map(|m| m.pole.norm())
            .filter(|&m| m > TINY_POLE * scale)
            .collect();
        let (lowest, highest) = match finite.is_empty() {
            true => (1.0, 1.0),
            false => (
                finite.iter().copied().fold(f64::INFINITY, f64::min),
                finite.iter().copied().fold(0.0, f64::max),
            ),
        };
        // A point of the imaginary axis between the poles for V(inp) and
        // the direct part.
        let (mid, vout, vin) = self.voltages_near(
            &mut lu,
            Complex64::new(0.0, (lowest * highest).sqrt()),
            out,
            inp,
        )?;
        if vin == Complex64::new(0.0, 0.0) {
            return Err(CircuitError::ZeroVoltage {
                node: inp,
                freq_hz: mid.im / std::f64::consts::TAU,
            });
        }
        for m in &mut modes.terms {
            m.residue /= vin;
            m.second /= vin;
        }
        modes.direct = (vout / vin - modes.transfer_at(mid)).re;
        let span = (highest / lowest).max(1.0);
        let check: Vec<f64> = (0..CHECK_POINTS)
            .map(|k| lowest * span.powf(k as f64 / (CHECK_POINTS - 1) as f64))
            .collect();
        modes.accuracy = self.mismatch(&mut lu, &modes, &check, out, inp)?;
        if modes.accuracy > MODES_CHECK {
            // A high order's residues come out of the null vectors less
            // accurately than its poles (a 25th-order Butterworth
            // bandpass's passive ideal: 2.3e-5 of the passband level):
            // refit them to the solved transfer by least squares, the
            // residue step of vector fitting (Gustavsen and Semlyen,
            // "Rational approximation of frequency domain responses by
            // vector fitting", IEEE Trans. Power Delivery 14, 1999).
            let fit: Vec<f64> = (0..REFIT_POINTS_PER_TERM * (modes.terms.len() + 1))
                .map(|k| {
                    let span = 100.0 * span;
                    lowest / 10.0
                        * span.powf(
                            k as f64 / (REFIT_POINTS_PER_TERM * (modes.terms.len() + 1) - 1) as f64,
                        )
                })
                .collect();
            let mut refitted = modes.clone();
            self.refit(&mut lu, &mut refitted, &fit, out, inp)?;
            refitted.accuracy = self.mismatch(&mut lu, &refitted, &check, out, inp)?;
            if refitted.accuracy < modes.accuracy {
                modes = refitted;
            }
            if modes.accuracy > MODES_USABLE {
                return Err(CircuitError::NoConvergence {
                    what: "step response: the poles and residues do not reproduce the transfer",
                });
            }
        }
        Ok(modes)
    }
}

/// The roots grouped: each with every root within [`CLUSTER`] of its size
/// (or of the largest root's [`TINY_POLE`] fraction, for roots near the
/// origin) of another member.
fn clusters(roots: &[Complex64], scale: f64) -> Vec<Vec<Complex64>> {
    let mut group: Vec<usize> = (0..roots.len()).collect();
    fn find(group: &mut [usize], i: usize) -> usize {
        let mut i = i;
        while group[i] != i {
            group[i] = group[group[i]];
            i = group[i];
        }
        i
    }
    for i in 0..roots.len() {
        for j in i + 1..roots.len() {
            let size = roots[i].norm().max(roots[j].norm()).max(TINY_POLE * scale);
            if (roots[i] - roots[j]).norm() <= CLUSTER * size {
                let (a, b) = (find(&mut group, i), find(&mut group, j));
                group[a] = b;
            }
        }
    }
    let mut out: Vec<Vec<Complex64>> = Vec::new();
    let mut index: Vec<Option<usize>> = vec![None; roots.len()];
    for (i, &root) in roots.iter().enumerate() {
        let g = find(&mut group, i);
        match index[g] {
            Some(k) => out[k].push(root),
            None => {
                index[g] = Some(out.len());
                out.push(vec![root]);
            }
        }
    }
    out
}

impl AcSystem {
    /// The largest difference between the expansion and the solved
    /// transfer over `omegas` (rad/s, on the imaginary axis), relative to
    /// the largest |H| there; NaN counts as infinite.
    fn mismatch(
        &self,
        lu: &mut Lu,
        modes: &Modes,
        omegas: &[f64],
        out: usize,
        inp: usize,
    ) -> Result<f64, CircuitError> {
        let (mut worst, mut largest) = (0.0f64, 0.0f64);
        for &w in omegas {
            let (s, vout, vin) = self.voltages_near(lu, Complex64::new(0.0, w), out, inp)?;
            let h = vout / vin;
            worst = worst.max((h - modes.transfer_at(s)).norm());
            largest = largest.max(h.norm());
        }
        let relative = worst / largest;
        Ok(if relative.is_nan() {
            f64::INFINITY
        } else {
            relative
        })
    }

    /// The residues and the direct part refitted, the poles and second
    /// coefficients kept, by linear least squares on the solved transfer
    /// at `omegas` (rad/s): real unknowns D, then per term its residue's
    /// real part and, for a complex pole, its imaginary part, each column
    /// scaled to unit length before the SVD solves it.
    fn refit(
        &self,
        lu: &mut Lu,
        modes: &mut Modes,
        omegas: &[f64],
        out: usize,
        inp: usize,
    ) -> Result<(), CircuitError> {
        let zero = Complex64::new(0.0, 0.0);
        let columns = 1 + modes
            .terms
            .iter()
            .map(|m| if m.pole.im > 0.0 { 2 } else { 1 })
            .sum::<usize>();
        let mut a = nalgebra::DMatrix::<f64>::zeros(2 * omegas.len(), columns);
        let mut b = nalgebra::DVector::<f64>::zeros(2 * omegas.len());
        for (k, &w) in omegas.iter().enumerate() {
            let (s, vout, vin) = self.voltages_near(lu, Complex64::new(0.0, w), out, inp)?;
            let fixed = Modes {
                direct: 0.0,
                accuracy: 0.0,
                terms: modes
                    .terms
                    .iter()
                    .map(|m| Mode {
                        residue: zero,
                        ..*m
                    })
                    .collect(),
            };
            let rest = vout / vin - fixed.transfer_at(s);
            b[2 * k] = rest.re;
            b[2 * k + 1] = rest.im;
            let mut column = 0;
            let mut put = |value: Complex64, column: usize| {
                a[(2 * k, column)] = value.re;
                a[(2 * k + 1, column)] = value.im;
            };
            put(Complex64::new(1.0, 0.0), column);
            column += 1;
            for m in &modes.terms {
                let (p, pc) = (m.pole, m.pole.conj());
                if m.pole.im > 0.0 {
                    put(1.0 / (s - p) + 1.0 / (s - pc), column);
                    let i = Complex64::new(0.0, 1.0);
                    put(i / (s - p) - i / (s - pc), column + 1);
                    column += 2;
                } else {
                    put(1.0 / (s - p), column);
                    column += 1;
                }
            }
        }
        let norms: Vec<f64> = (0..columns)
            .map(|j| a.column(j).norm().max(f64::MIN_POSITIVE))
            .collect();
        for (j, &n) in norms.iter().enumerate() {
            a.column_mut(j).scale_mut(1.0 / n);
        }
        let x =
            a.svd(true, true)
                .solve(&b, f64::EPSILON)
                .map_err(|_| CircuitError::NoConvergence {
                    what: "step response: refitting the residues",
                })?;
        let value = |j: usize| x[j] / norms[j];
        modes.direct = value(0);
        let mut column = 1;
        for m in &mut modes.terms {
            if m.pole.im > 0.0 {
                m.residue = Complex64::new(value(column), value(column + 1));
                column += 2;
            } else {
                m.residue = Complex64::new(value(column), 0.0);
                column += 1;
            }
        }
        Ok(())
    }
}

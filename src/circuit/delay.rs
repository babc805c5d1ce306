//! Exact group delay on the dense path, defined at every frequency where
//! the transfer is: also at an exact transmission zero, where it is the
//! limit of the delay on either side.
//!
//! With A(s) = G + sC and A x = b, the Taylor coefficients of the solution
//! about s0 = j omega, x(s) = sum a_k (s - s0)^k, follow from the factors
//! of A(s0) alone: A(s) = A(s0) + (s - s0) C, so A(s0) a_0 = b and
//! A(s0) a_k = -C a_(k-1). The group delay of H = V(out)/V(in) is
//! tau = -Re(d ln H / ds) (on s = j omega, -d arg H / d omega), and
//! d ln V(out)/ds = a_1 / a_0 at the output where a_0 is non-zero (one
//! more solve, as [`super::AcSystem::group_delay`] does).
//!
//! Where V(out) vanishes to order m (a_0 .. a_(m-1) zero, a_m not),
//! d ln V(out)/ds = m / (s - s0) + a_(m+1) / a_m + O(s - s0). On the
//! j omega axis s - s0 is imaginary, so the pole term adds nothing to the
//! delay, and the delay on both sides tends to -Re(a_(m+1)/a_m - a_1/a_0
//! at the input): finite, and the value this module gives at the zero.
//! V(out) is a ratio of polynomials of degree at most n (the unknowns;
//! Cramer's rule), so if a_0 .. a_n all vanish it vanishes identically
//! and no delay exists.

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

use super::lu::Lu;
use super::{AcSystem, CircuitError};

const ZERO: Complex64 = Complex64::new(0.0, 0.0);

/// Relative step to either side of a frequency where the circuit
/// equations are singular although the transfer exists: a lossless
/// resonance whose circulating current the output does not see (the
/// passive ideal of a notch at its exact centre, 48.98979485566357 Hz in
/// the mains-notch example). The transfer and the delay are smooth there,
/// so the mean of the two sides is their value to O(step^2), 1e-10
/// relative; the solves on either side are nearly singular only along
/// the circulating current, which the output does not see. Checked by
/// tests/sweep.rs against the same grid moved off the resonance.
pub const RESONANCE_STEP: f64 = 1e-5;

/// Why a dense point has no transfer or delay; the caller adds the
/// frequency and nodes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum PointFailure {
    /// A(s0) is numerically singular.
    Singular,
    /// V(in) is zero: no transfer ratio.
    ZeroInput,
    /// V(out) vanishes identically: no delay.
    ZeroOutput,
}

/// The error of a point failure at `freq_hz` with nodes [out, in].
pub(crate) fn point_error(f: PointFailure, freq_hz: f64, [out, inp]: [usize; 2]) -> CircuitError {
    match f {
        PointFailure::Singular => CircuitError::Singular { freq_hz },
        PointFailure::ZeroInput => CircuitError::ZeroVoltage { node: inp, freq_hz },
        PointFailure::ZeroOutput => CircuitError::ZeroVoltage { node: out, freq_hz },
    }
}

/// The dense transfer and exact group delay of one circuit, with buffers
/// allocated once (see the module documentation).
#[derive(Debug, Clone)]
pub struct DenseDelay {
    n: usize,
    lu: Lu,
    /// a_0, the solution.
    x: Vec<Complex64>,
    /// The last two Taylor coefficients computed.
    a: Vec<Complex64>,
    next: Vec<Complex64>,
}

impl DenseDelay {
    /// Buffers for a system of this size.
    pub fn new(system: &AcSystem) -> DenseDelay {
        DenseDelay::with_size(system.g().nrows())
    }

    pub(crate) fn with_size(n: usize) -> DenseDelay {
        DenseDelay {
            n,
            lu: Lu::new(n),
            x: vec![ZERO; n],
            a: vec![ZERO; n],
            next: vec![ZERO; n],
        }
    }

    /// V(out)/V(inp) and its group delay in seconds at one frequency, by
    /// the partially pivoted dense LU that [`AcSystem::transfer`] and
    /// [`AcSystem::group_delay`] use, on the same matrices and in the
    /// same order of operations. Where V(out) is exactly zero the delay
    /// is the limit the module documentation derives (where
    /// [`AcSystem::group_delay`] reports [`CircuitError::ZeroVoltage`]);
    /// it is always finite. Errors as [`AcSystem::group_delay`], and
    /// [`CircuitError::ZeroVoltage`] of `out` only where V(out) vanishes
    /// identically.
    pub fn transfer_delay(
        &mut self,
        system: &AcSystem,
        freq_hz: f64,
        out: usize,
        inp: usize,
    ) -> Result<(Complex64, f64), CircuitError> {
        let node_count = system.netlist().nodes.len();
        for (node, context) in [(out, "output"), (inp, "input")] {
            if node >= node_count {
                return Err(CircuitError::NodeOutOfRange {
                    context: context.to_string(),
                    node,
                    node_count,
                });
            }
        }
        if !(freq_hz.is_finite() && freq_hz >= 0.0) {
            return Err(CircuitError::BadFrequency { freq_hz });
        }
        if self.n != system.g().nrows() {
            *self = DenseDelay::new(system);
        }
        let unknowns = [system.unknown_of_node(out), system.unknown_of_node(inp)];
        let omega = std::f64::consts::TAU * freq_hz;
        self.point(
            system.g(),
            system.c(),
            system.b(),
            omega,
            unknowns,
            Some(false),
        )
        .map_err(|f| point_error(f, freq_hz, [out, inp]))
    }

    /// V(out)/V(in) and, when `delay` is given (its `at_zero` as for
    /// [`DenseDelay::delay`]), the group delay at omega (0 without),
    /// `unknowns` = [out, in], across a lossless resonance where the
    /// equations are singular (see [`RESONANCE_STEP`]).
    pub(crate) fn point(
        &mut self,
        g: &DMatrix<f64>,
        c: &DMatrix<f64>,
        b: &DVector<f64>,
        omega: f64,
        unknowns: [Option<usize>; 2],
        delay: Option<bool>,
    ) -> Result<(Complex64, f64), PointFailure> {
        let mut at = |omega: f64| -> Result<(Complex64, f64), PointFailure> {
            if !self.solve(g, c, b, omega) {
                return Err(PointFailure::Singular);
            }
            let [vout, vin] = unknowns.map(|u| self.voltage(u));
            if vin == ZERO {
                return Err(PointFailure::ZeroInput);
            }
            let tau = match delay {
                Some(at_zero) => self.delay(c, unknowns, at_zero)?,
                None => 0.0,
            };
            Ok((vout / vin, tau))
        };
        match at(omega) {
            Err(PointFailure::Singular) if omega > 0.0 => {
                let (below, above) = (
                    at(omega * (1.0 - RESONANCE_STEP))?,
                    at(omega * (1.0 + RESONANCE_STEP))?,
                );
                Ok(((below.0 + above.0) / 2.0, (below.1 + above.1) / 2.0))
            }
            other => other,
        }
    }

    /// Factors G + j omega C and solves for a_0; `false` if singular.
    pub(crate) fn solve(
        &mut self,
        g: &DMatrix<f64>,
        c: &DMatrix<f64>,
        b: &DVector<f64>,
        omega: f64,
    ) -> bool {
        if !self.lu.factor(g, c, Complex64::new(0.0, omega)) {
            return false;
        }
        for (x, &b) in self.x.iter_mut().zip(b.iter()) {
            *x = Complex64::new(b, 0.0);
        }
        self.lu.solve(&mut self.x);
        self.x.iter().all(|z| z.is_finite())
    }

    /// Unknown `u` of the last solution (0 for ground).
    pub(crate) fn voltage(&self, u: Option<usize>) -> Complex64 {
        u.map_or(ZERO, |u| self.x[u])
    }

    /// The next Taylor coefficient: `next` = -A^-1 C `a`.
    fn step(&mut self, c: &DMatrix<f64>) {
        for (i, d) in self.next.iter_mut().enumerate() {
            let cx: Complex64 = (0..self.n).map(|j| c[(i, j)] * self.a[j]).sum();
            *d = -cx;
        }
        self.lu.solve(&mut self.next);
        std::mem::swap(&mut self.a, &mut self.next);
    }

    /// The group delay after a successful [`DenseDelay::solve`] with
    /// V(in) non-zero, `unknowns` = [out, in]. With `at_zero` the output
    /// is taken as vanishing (a caller that found V(out) = 0 by another
    /// path); otherwise it is where V(out) is zero, or so small that
    /// a_1/a_0 overflows.
    pub(crate) fn delay(
        &mut self,
        c: &DMatrix<f64>,
        [out, inp]: [Option<usize>; 2],
        at_zero: bool,
    ) -> Result<f64, PointFailure> {
        let at = |v: &[Complex64], u: Option<usize>| u.map_or(ZERO, |u| v[u]);
        let (vout, vin) = (at(&self.x, out), at(&self.x, inp));
        self.a.copy_from_slice(&self.x);
        self.step(c);
        let input = at(&self.a, inp) / vin;
        if !at_zero && vout != ZERO {
            // The operations of AcSystem::group_delay, so both agree bit
            // for bit.
            let delay = -(at(&self.a, out) / vout - input).re;
            if delay.is_finite() {
                return Ok(delay);
            }
        }
        // a holds a_1: find the first non-zero a_m at the output.
        let mut m = 1;
        while at(&self.a, out) == ZERO {
            if m == self.n {
                return Err(PointFailure::ZeroOutput);
            }
            self.step(c);
            m += 1;
        }
        let am = at(&self.a, out);
        self.step(c);
        let delay = -(at(&self.a, out) / am - input).re;
        if delay.is_finite() {
            Ok(delay)
        } else {
            Err(PointFailure::ZeroOutput)
        }
    }
}

//! Natural frequencies of a circuit: the roots s of det(G + sC) = 0, with
//! every independent source set to zero (voltage sources become shorts).
//!
//! Method (shift and invert): for a real shift sigma that is not a root,
//! G + sC = K (I + (s - sigma) M) with K = G + sigma C and M = K^-1 C, so
//! each eigenvalue mu != 0 of the real matrix M gives the root
//! s = sigma - 1/mu, and mu = 0 belongs to the algebraic (infinite) part
//! of the equations (ideal op-amp rows, source rows).
//!
//! The zero eigenvalues come out blurred by rounding, so mu counts as
//! zero below a fixed fraction of the largest (see [`ZERO_EIGENVALUE`]).

use nalgebra::{DMatrix, Schur};
use num_complex::Complex64;

use super::lu::Lu;
use super::{AcSystem, CircuitError};

/// Eigenvalues of M below this fraction of the largest count as zero
/// (infinite roots). Measured on 30 fixed-seed netlists of 35 to 49
/// unknowns (R, L, C, sources, ideal and single-pole op-amps): the zero
/// eigenvalues came out at most 4e-15 of the largest, the smallest finite
/// one at 1.7e-6, so 1e-12 sits in the gap with a factor of 250 to
/// spare on the low side and 1.7e6 on the high side. A root more than 1e12
/// times farther from the shift than the nearest one would be lost.
const ZERO_EIGENVALUE: f64 = 1e-12;

/// Total QR iterations allowed to the real Schur decomposition, per
/// unknown (nalgebra's own default is unbounded). The shifted QR iteration
/// usually needs two or three per eigenvalue; 200 only stops a runaway.
const SCHUR_SWEEPS: usize = 200;

/// Shifts tried in turn, as multiples of |G| / |C|: a shift that happens
/// to sit on a root (K singular) is replaced by the next; the irrational
/// ratios make a second coincidence vanishingly unlikely.
const SHIFT_FACTORS: [f64; 3] = [1.0, std::f64::consts::SQRT_2, std::f64::consts::E];

impl AcSystem {
    /// The natural frequencies, rad/s (complex s), sorted by decreasing
    /// real part, so a circuit is stable when the first has a negative
    /// real part. Sources count as zero. Empty for a circuit without
    /// reactive elements or finite-bandwidth op-amps.
    pub fn natural_frequencies(&self) -> Result<Vec<Complex64>, CircuitError> {
        let (g, c) = (self.g(), self.c());
        let c_norm = c.norm();
        if c.nrows() == 0 || c_norm == 0.0 {
            return Ok(Vec::new());
        }
        let scale = (g.norm() / c_norm).max(f64::MIN_POSITIVE);
        let mut lu = Lu::new(c.nrows());
        // A shift on a root makes K singular; one whose matrix M the QR
        // iteration does not bring to Schur form within its sweeps (seen
        // on an 8th-order inverse Chebyshev bandstop's passive ideal, by
        // the generative test) gets the next shift too.
        let mut failure = CircuitError::NoConvergence {
            what: "natural frequencies: every shift hit a root",
        };
        for sigma in SHIFT_FACTORS.map(|f| f * scale) {
            if let Some(m) = shift_invert(&mut lu, g, c, sigma) {
                match roots(sigma, m) {
                    Ok(found) => return Ok(found),
                    Err(e) => failure = e,
                }
            }
        }
        Err(failure)
    }
}

/// M = (G + sigma C)^-1 C, or `None` if G + sigma C is singular.
fn shift_invert(
    lu: &mut Lu,
    g: &DMatrix<f64>,
    c: &DMatrix<f64>,
    sigma: f64,
) -> Option<DMatrix<f64>> {
    if !lu.factor(g, c, Complex64::new(sigma, 0.0)) {
        return None;
    }
    let n = c.nrows();
    let mut m = DMatrix::zeros(n, n);
    let mut column = vec![Complex64::new(0.0, 0.0); n];
    for j in 0..n {
        for (x, &cij) in column.iter_mut().zip(c.column(j).iter()) {
            *x = Complex64::new(cij, 0.0);
        }
        lu.solve(&mut column);
        for (i, x) in column.iter().enumerate() {
            // K, C and so the solution are real: imaginary parts stay 0.
            m[(i, j)] = x.re;
        }
    }
    Some(m)
}

/// The roots s = sigma - 1/mu of the eigenvalues mu of M.
fn roots(sigma: f64, m: DMatrix<f64>) -> Result<Vec<Complex64>, CircuitError> {
    let sweeps = SCHUR_SWEEPS * m.nrows();
    let schur = Schur::try_new(m, f64::EPSILON, sweeps).ok_or(CircuitError::NoConvergence {
        what: "natural frequencies: Schur decomposition",
    })?;
    let mu = schur.complex_eigenvalues();
    let largest = mu.iter().map(|z| z.norm()).fold(0.0, f64::max);
    let mut found: Vec<Complex64> = mu
        .iter()
        .filter(|z| z.norm() > ZERO_EIGENVALUE * largest)
        .map(|z| sigma - 1.0 / z)
        .collect();
    found.sort_by(|a, b| b.re.total_cmp(&a.re).then(a.im.total_cmp(&b.im)));
    Ok(found)
}

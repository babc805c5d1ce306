//! In-place LU factorization of the complex system matrix G + jwC, with
//! row equilibration and partial pivoting, into buffers allocated once.
//!
//! Invariant: after a successful [`Lu::factor`], `a` holds the unit-lower
//! factor L (below the diagonal) and U (on and above it) of P D A, where D
//! scales every row of A to a largest entry of 1 and P is the sequence of
//! row swaps in `swaps`. So A = D^-1 P^T L U and A^T = U^T L^T P D^-1,
//! which gives the transposed solve (adjoint sensitivities) from the same
//! factors.

use nalgebra::DMatrix;
use num_complex::Complex64;

/// Smallest pivot accepted after row equilibration. Eliminating an exactly
/// singular matrix (a floating node) leaves a pivot made of rounding
/// residue, of order n * eps (about 2e-14 for 100 unknowns); 1e3 * eps
/// stays above that, and a pivot below it means a condition number over
/// about 4e12, where fewer than 4 significant digits of the answer survive.
const PIVOT_FLOOR: f64 = 1e3 * f64::EPSILON;

/// Magnitude used for pivoting and scaling: |re| + |im| orders complex
/// numbers within a factor sqrt(2) of the modulus, without a square root.
fn size(z: Complex64) -> f64 {
    z.re.abs() + z.im.abs()
}

/// Work buffers of one factorization.
#[derive(Debug, Clone)]
pub(crate) struct Lu {
    n: usize,
    /// Row-major n x n.
    a: Vec<Complex64>,
    /// Row scale factors D.
    scale: Vec<f64>,
    /// At step k, row k was swapped with row `swaps[k]`.
    swaps: Vec<usize>,
}

impl Lu {
    /// Buffers for an n x n system.
    pub fn new(n: usize) -> Lu {
        Lu {
            n,
            a: vec![Complex64::new(0.0, 0.0); n * n],
            scale: vec![0.0; n],
            swaps: vec![0; n],
        }
    }

    /// Factors G + sC; `false` if the matrix is numerically singular.
    pub fn factor(&mut self, g: &DMatrix<f64>, c: &DMatrix<f64>, s: Complex64) -> bool {
        self.fill(g, c, s);
        self.equilibrate() && self.eliminate()
    }

    /// Writes G + sC; for s = jw the real part is G exactly.
    fn fill(&mut self, g: &DMatrix<f64>, c: &DMatrix<f64>, s: Complex64) {
        let n = self.n;
        for i in 0..n {
            for j in 0..n {
                let (gij, cij) = (g[(i, j)], c[(i, j)]);
                self.a[i * n + j] = Complex64::new(gij + s.re * cij, s.im * cij);
            }
        }
    }

    /// Scales each row to a largest entry of 1; `false` on an empty row.
    fn equilibrate(&mut self) -> bool {
        let n = self.n;
        for (row, scale) in self.a.chunks_exact_mut(n.max(1)).zip(&mut self.scale) {
            let largest = row.iter().map(|&z| size(z)).fold(0.0, f64::max);
            if largest == 0.0 {
                return false;
            }
            *scale = 1.0 / largest;
            row.iter_mut().for_each(|z| *z *= *scale);
        }
        true
    }

    /// Gaussian elimination with partial pivoting; `false` at the first
    /// pivot at or below [`PIVOT_FLOOR`].
    fn eliminate(&mut self) -> bool {
        let n = self.n;
        for k in 0..n {
            let (p, pivot) =
                (k..n)
                    .map(|i| (i, size(self.a[i * n + k])))
                    .fold(
                        (k, -1.0),
                        |best, cand| if cand.1 > best.1 { cand } else { best },
                    );
            if pivot <= PIVOT_FLOOR {
                return false;
            }
            self.swaps[k] = p;
            if p != k {
                for j in 0..n {
                    self.a.swap(k * n + j, p * n + j);
                }
            }
            let inv = 1.0 / self.a[k * n + k];
            let (top, bottom) = self.a.split_at_mut((k + 1) * n);
            let pivot_row = &top[k * n..];
            for row in bottom.chunks_exact_mut(n) {
                let l = row[k] * inv;
                row[k] = l;
                if l != Complex64::new(0.0, 0.0) {
                    for j in k + 1..n {
                        row[j] -= l * pivot_row[j];
                    }
                }
            }
        }
        true
    }

    /// Solves A x = rhs in place (`x` holds rhs on entry) with the factors
    /// of the last successful [`Lu::factor`].
    pub fn solve(&self, x: &mut [Complex64]) {
        let n = self.n;
        for (xi, s) in x.iter_mut().zip(&self.scale) {
            *xi *= *s;
        }
        for (k, &p) in self.swaps.iter().enumerate() {
            x.swap(k, p);
        }
        for i in 0..n {
            let row = &self.a[i * n..i * n + i];
            let sum: Complex64 = row.iter().zip(&x[..i]).map(|(l, xj)| l * xj).sum();
            x[i] -= sum;
        }
        for i in (0..n).rev() {
            let row = &self.a[i * n..(i + 1) * n];
            let sum: Complex64 = row[i + 1..]
                .iter()
                .zip(&x[i + 1..])
                .map(|(u, xj)| u * xj)
                .sum();
            x[i] = (x[i] - sum) / row[i];
        }
    }

    /// Solves A^T y = rhs in place (`y` holds rhs on entry; plain
    /// transpose, not conjugate) with the factors of the last successful
    /// [`Lu::factor`]: U^T z = rhs forward, L^T w = z backward, then
    /// y = D P^T w. Both triangular solves walk rows of `a`, as the
    /// factors are stored row by row.
    pub fn solve_transposed(&self, y: &mut [Complex64]) {
        let n = self.n;
        for i in 0..n {
            let row = &self.a[i * n..(i + 1) * n];
            y[i] /= row[i];
            let yi = y[i];
            for (yj, u) in y[i + 1..].iter_mut().zip(&row[i + 1..]) {
                *yj -= u * yi;
            }
        }
        for i in (0..n).rev() {
            let yi = y[i];
            for (yj, l) in y[..i].iter_mut().zip(&self.a[i * n..i * n + i]) {
                *yj -= l * yi;
            }
        }
        for (k, &p) in self.swaps.iter().enumerate().rev() {
            y.swap(k, p);
        }
        for (yi, s) in y.iter_mut().zip(&self.scale) {
            *yi *= *s;
        }
    }
}

//! The pivot sequence of the sparse AC solver ([`super::SparseAc`]),
//! chosen once per circuit: Markowitz's fill-reducing rule with threshold
//! pivoting, run on the matrix G + sC evaluated at a few check
//! frequencies at once.
//!
//! Why values and not the pattern alone: modified nodal matrices have zero
//! diagonals (op-amp rows, source and inductor branch rows), and which
//! entry of a column is safe to divide by depends on frequency (a
//! capacitor's entry is negligible at 1 Hz and dominant at 10 MHz). So a
//! candidate pivot must pass the threshold test at every check frequency.
//!
//! Invariants of a returned [`Ordering`]: `rows` and `cols` are
//! permutations of 0..n; at step t the pivot is entry (rows\[t\],
//! cols\[t\]); `filled` marks every entry of the original pattern plus
//! every fill-in the elimination creates, so the LU factors of the
//! permuted matrix live entirely inside it.

use num_complex::Complex64;

/// A candidate pivot must be at least this fraction of the largest entry
/// of its column (rows scaled to a common size) at every check
/// frequency. 0.1 is the compromise between stability and fill usually
/// recommended for threshold pivoting (Duff, Erisman and Reid, "Direct
/// Methods for Sparse Matrices", Oxford 1986, section 7.8; from memory).
pub(crate) const SELECT_THRESHOLD: f64 = 0.1;

/// |re| + |im|: within a factor sqrt(2) of the modulus, without a root.
pub(crate) fn size(z: Complex64) -> f64 {
    z.re.abs() + z.im.abs()
}

/// The matrix at one check frequency.
pub(crate) struct Sample {
    /// G + sC, row-major n x n.
    pub values: Vec<Complex64>,
    /// Size of each row (see `sparse::row_size`), so entries of different
    /// rows compare on one scale.
    pub row_size: Vec<f64>,
}

/// The chosen pivot sequence and the pattern it fills.
#[derive(Debug, Clone)]
pub(crate) struct Ordering {
    /// Original row of the pivot at each step.
    pub rows: Vec<usize>,
    /// Original column of the pivot at each step.
    pub cols: Vec<usize>,
    /// Row-major n x n: structurally nonzero in L + U (original indices).
    pub filled: Vec<bool>,
}

/// A candidate pivot and how good it is.
#[derive(Clone, Copy)]
struct Candidate {
    row: usize,
    col: usize,
    /// Markowitz count (r - 1)(c - 1): an upper bound on its fill-in.
    cost: usize,
    /// Smallest, over the samples, of |entry| / largest |entry| of its
    /// column (scaled rows).
    ratio: f64,
}

impl Candidate {
    /// Whether `self` is a better pivot than `other`: among candidates
    /// passing the threshold the cheapest, then the larger ratio; a
    /// candidate failing it only wins over another failing one, by ratio.
    fn beats(&self, other: &Candidate) -> bool {
        let (pass, other_pass) = (
            self.ratio >= SELECT_THRESHOLD,
            other.ratio >= SELECT_THRESHOLD,
        );
        match (pass, other_pass) {
            (true, false) => true,
            (false, true) => false,
            (true, true) => (self.cost, -self.ratio) < (other.cost, -other.ratio),
            // Equal ratios: the first in (row, column) order, as a scan
            // in that order would keep.
            (false, false) => {
                (-self.ratio, self.row, self.col) < (-other.ratio, other.row, other.col)
            }
        }
    }
}

/// Elimination state shared by every sample. The filled pattern is also
/// kept as lists per row and per column, so every scan walks the
/// nonzeros of the remaining submatrix, not its n^2 entries: on the
/// floating-GIC build of an 11th-order bandstop (n = 167, 40 check
/// frequencies) the dense scans took 0.3 s per ordering and most of a
/// 3.5 s `bom` run.
struct State<'a> {
    n: usize,
    samples: &'a mut [Sample],
    filled: Vec<bool>,
    /// Filled columns of each row, ascending (so ties between candidates
    /// are broken by (row, column), as a dense scan would).
    row_cols: Vec<Vec<usize>>,
    /// Filled rows of each column, in no particular order.
    col_rows: Vec<Vec<usize>>,
    row_done: Vec<bool>,
    col_done: Vec<bool>,
}

impl State<'_> {
    fn new<'a>(n: usize, pattern: &[bool], samples: &'a mut [Sample]) -> State<'a> {
        let mut row_cols = vec![Vec::new(); n];
        let mut col_rows = vec![Vec::new(); n];
        for i in 0..n {
            for j in (0..n).filter(|&j| pattern[i * n + j]) {
                row_cols[i].push(j);
                col_rows[j].push(i);
            }
        }
        State {
            n,
            samples,
            filled: pattern.to_vec(),
            row_cols,
            col_rows,
            row_done: vec![false; n],
            col_done: vec![false; n],
        }
    }

    /// The filled entries (row, column) of the remaining submatrix, row
    /// by row, columns ascending.
    fn remaining(&self) -> impl Iterator<Item = (usize, usize)> + '_ {
        (0..self.n)
            .filter(|&i| !self.row_done[i])
            .flat_map(move |i| {
                self.row_cols[i]
                    .iter()
                    .filter(|&&j| !self.col_done[j])
                    .map(move |&j| (i, j))
            })
    }

    /// The largest scaled |entry| of remaining column `col` at each
    /// sample. Entries outside the filled pattern are exactly zero.
    fn column_peak(&self, col: usize) -> Vec<f64> {
        let n = self.n;
        let rows = || self.col_rows[col].iter().filter(|&&i| !self.row_done[i]);
        self.samples
            .iter()
            .map(|s| {
                rows()
                    .map(|&i| size(s.values[i * n + col]) / s.row_size[i])
                    .fold(0.0, f64::max)
            })
            .collect()
    }

    /// Nonzeros of each remaining row and column within the remaining
    /// submatrix.
    fn counts(&self) -> (Vec<usize>, Vec<usize>) {
        let (mut r, mut c) = (vec![0; self.n], vec![0; self.n]);
        for (i, j) in self.remaining() {
            r[i] += 1;
            c[j] += 1;
        }
        (r, c)
    }

    /// The best pivot of the remaining submatrix, or `None` if none is
    /// nonzero at every sample. Candidates are taken cheapest first, so
    /// the search stops at the first cost above that of a passing
    /// candidate, and a column's peaks are worked out only when one of
    /// its entries is taken: the scan of every entry at every sample made
    /// the ordering most of a 5 s `sweep` of a 12th-order elliptic
    /// bandstop (n = 255, 27 orderings of about 25 samples).
    fn best(&self) -> Option<Candidate> {
        let n = self.n;
        let (r, c) = self.counts();
        let mut by_cost: Vec<(usize, usize, usize)> = self
            .remaining()
            .map(|(i, j)| ((r[i] - 1) * (c[j] - 1), i, j))
            .collect();
        // Stable: within a cost, (row, column) order.
        by_cost.sort_by_key(|&(cost, _, _)| cost);
        let mut peaks: Vec<Option<Vec<f64>>> = vec![None; n];
        let mut best: Option<Candidate> = None;
        for (cost, i, j) in by_cost {
            if best.is_some_and(|b| b.ratio >= SELECT_THRESHOLD && cost > b.cost) {
                break;
            }
            // A pivot that is zero at any sample is no pivot at all
            // (and would make the ratio 0/0 in an all-zero column).
            if self
                .samples
                .iter()
                .any(|s| size(s.values[i * n + j]) == 0.0)
            {
                continue;
            }
            let peak = peaks[j].get_or_insert_with(|| self.column_peak(j));
            let ratio = self
                .samples
                .iter()
                .zip(peak.iter())
                .map(|(s, peak)| size(s.values[i * n + j]) / s.row_size[i] / peak)
                .fold(f64::INFINITY, f64::min);
            let cand = Candidate {
                row: i,
                col: j,
                cost,
                ratio,
            };
            if best.is_none_or(|b| cand.beats(&b)) {
                best = Some(cand);
            }
        }
        best
    }

    /// Eliminates column `col` below and above pivot row `row` in every
    /// sample, recording the fill.
    fn eliminate(&mut self, row: usize, col: usize) {
        let n = self.n;
        self.row_done[row] = true;
        self.col_done[col] = true;
        let targets: Vec<usize> = self.col_rows[col]
            .iter()
            .copied()
            .filter(|&i| !self.row_done[i])
            .collect();
        let sources: Vec<usize> = self.row_cols[row]
            .iter()
            .copied()
            .filter(|&j| !self.col_done[j])
            .collect();
        for &i in &targets {
            for &j in &sources {
                if !self.filled[i * n + j] {
                    self.filled[i * n + j] = true;
                    let cols = &mut self.row_cols[i];
                    let at = cols.partition_point(|&k| k < j);
                    cols.insert(at, j);
                    self.col_rows[j].push(i);
                }
            }
        }
        for s in self.samples.iter_mut() {
            let inv = 1.0 / s.values[row * n + col];
            for &i in &targets {
                let f = s.values[i * n + col] * inv;
                for &j in &sources {
                    let u = s.values[row * n + j];
                    s.values[i * n + j] -= f * u;
                }
            }
        }
    }
}

/// Chooses the pivot sequence for an n x n matrix with the given pattern
/// (row-major) from its values at each sample; `None` if at some step no
/// remaining entry is nonzero at every sample (the matrix is singular at
/// one of them, or an entry cancels exactly there).
pub(crate) fn markowitz(n: usize, pattern: &[bool], samples: &mut [Sample]) -> Option<Ordering> {
    let mut state = State::new(n, pattern, samples);
    let (mut rows, mut cols) = (Vec::with_capacity(n), Vec::with_capacity(n));
    for _ in 0..n {
        let pivot = state.best()?;
        state.eliminate(pivot.row, pivot.col);
        rows.push(pivot.row);
        cols.push(pivot.col);
    }
    Some(Ordering {
        rows,
        cols,
        filled: state.filled,
    })
}

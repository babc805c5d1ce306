//! One pivot order of the sparse AC solver and everything that depends
//! on it: the slots of the filled pattern, the straight-line elimination
//! program, the values of the loaded circuit in slot order, and the work
//! buffers of one pass over [`LANES`] frequency points.
//!
//! Invariants: `slot_g` and `slot_c` hold, per slot, the entry of G and C
//! of the circuit last loaded (zero at fill-in slots); `row_g` and
//! `row_c` the largest |G| and |C| entry of each step's pivot row; `rhs`
//! the excitation in step order; `c_terms` the nonzero entries of C in
//! step space. The pattern and the order never change.

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

use super::lanes::{Lanes, LANES};
use super::ordering::Ordering;

/// Run-time threshold: a scaled multiplier above 1 / GUARD_THRESHOLD
/// rejects the lane. Looser than the selection threshold
/// (`ordering::SELECT_THRESHOLD`, 0.1) so frequencies between the check
/// points keep the sparse path while the growth stays bounded: a
/// multiplier of at most 1e2 per step, where partial pivoting allows 1.
pub(crate) const GUARD_THRESHOLD: f64 = 1e-2;

/// A pivot at or below this fraction of its row size rejects the lane:
/// the dense LU rejects pivots below the same fraction of an equilibrated
/// row (a condition number above about 4e12), so it is left to decide
/// whether the matrix is singular.
const PIVOT_FLOOR: f64 = 1e3 * f64::EPSILON;

pub(crate) fn row_size(g: f64, c: f64, omega: f64) -> f64 {
    g.max(omega * c)
}

/// One entry of the original pattern and where it lives.
#[derive(Debug, Clone, Copy)]
struct Entry {
    row: usize,
    col: usize,
    slot: usize,
    /// The step whose pivot row is `row`.
    step: usize,
}

/// Offsets of per-step lists in flat arrays (compressed rows).
#[derive(Debug, Clone, Default)]
struct Lists {
    start: Vec<usize>,
    slot: Vec<usize>,
    step: Vec<usize>,
}

impl Lists {
    fn range(&self, t: usize) -> std::ops::Range<usize> {
        self.start[t]..self.start[t + 1]
    }
}

/// The straight-line LU, in step space: step t pivots on slot
/// `pivot[t]`; `lower` lists the entries below it (slot, row step),
/// `upper` those right of it (slot, column step); `targets` holds, for
/// each lower entry in turn, the slot each upper entry's product updates.
#[derive(Debug, Clone)]
struct Program {
    pivot: Vec<usize>,
    lower: Lists,
    upper: Lists,
    target_start: Vec<usize>,
    targets: Vec<usize>,
    /// Steps the forward substitution visits (ascending): those the
    /// excitation reaches through L.
    forward: Vec<usize>,
}

/// Slot numbers of the filled pattern, in step space.
struct Slots {
    n: usize,
    /// Row-major (row step, column step) -> slot, or `usize::MAX`.
    of: Vec<usize>,
}

impl Slots {
    /// Numbers the filled entries step by step: the pivot, the entries
    /// right of it, then those below it.
    fn new(order: &Ordering) -> Slots {
        let n = order.rows.len();
        let filled = |a: usize, b: usize| order.filled[order.rows[a] * n + order.cols[b]];
        let mut of = vec![usize::MAX; n * n];
        let mut next = 0;
        for t in 0..n {
            let right = (t..n).filter(|&b| filled(t, b)).map(|b| (t, b));
            let below = (t + 1..n).filter(|&a| filled(a, t)).map(|a| (a, t));
            for (a, b) in right.chain(below) {
                of[a * n + b] = next;
                next += 1;
            }
        }
        Slots { n, of }
    }

    fn get(&self, a: usize, b: usize) -> usize {
        self.of[a * self.n + b]
    }

    fn filled(&self, a: usize, b: usize) -> bool {
        self.get(a, b) != usize::MAX
    }

    fn count(&self) -> usize {
        self.of.iter().filter(|&&s| s != usize::MAX).count()
    }
}

impl Program {
    /// The program of an ordering; `excited` are the rows b may fill.
    fn new(slots: &Slots, excited_steps: &[usize]) -> Program {
        let n = slots.n;
        let mut p = Program {
            pivot: (0..n).map(|t| slots.get(t, t)).collect(),
            lower: Lists::default(),
            upper: Lists::default(),
            target_start: Vec::with_capacity(n + 1),
            targets: Vec::new(),
            forward: Vec::new(),
        };
        for t in 0..n {
            p.lower.start.push(p.lower.slot.len());
            p.upper.start.push(p.upper.slot.len());
            p.target_start.push(p.targets.len());
            let below: Vec<usize> = (t + 1..n).filter(|&a| slots.filled(a, t)).collect();
            let right: Vec<usize> = (t + 1..n).filter(|&b| slots.filled(t, b)).collect();
            for &a in &below {
                p.lower.slot.push(slots.get(a, t));
                p.lower.step.push(a);
                // Elimination filled (a, b) for every such pair.
                p.targets.extend(right.iter().map(|&b| slots.get(a, b)));
            }
            for &b in &right {
                p.upper.slot.push(slots.get(t, b));
                p.upper.step.push(b);
            }
        }
        p.lower.start.push(p.lower.slot.len());
        p.upper.start.push(p.upper.slot.len());
        p.target_start.push(p.targets.len());
        p.forward = p.reach(excited_steps);
        p
    }

    /// The steps reachable from `from` along L (ascending).
    fn reach(&self, from: &[usize]) -> Vec<usize> {
        let n = self.pivot.len();
        let mut hit = vec![false; n];
        from.iter().for_each(|&t| hit[t] = true);
        for t in 0..n {
            if hit[t] {
                for k in self.lower.range(t) {
                    hit[self.lower.step[k]] = true;
                }
            }
        }
        (0..n).filter(|&t| hit[t]).collect()
    }
}

/// One pivot order, its program and its buffers.
#[derive(Debug, Clone)]
pub(crate) struct Plan {
    n: usize,
    entries: Vec<Entry>,
    /// Unknown -> the step that pivots on its column.
    step_of_unknown: Vec<usize>,
    /// Step -> the original row of its pivot.
    row_of_step: Vec<usize>,
    /// Row -> the step that pivots on it.
    step_of_row: Vec<usize>,
    program: Program,
    slot_g: Vec<f64>,
    slot_c: Vec<f64>,
    row_g: Vec<f64>,
    row_c: Vec<f64>,
    rhs: Vec<f64>,
    values: Vec<Lanes>,
    inv_pivot: Vec<Lanes>,
    scale: Vec<[f64; LANES]>,
    y: Vec<Lanes>,
    /// Steps the back substitution needs for the unknowns in `back_for`
    /// (descending), and a marker buffer to find them.
    back: Vec<usize>,
    back_for: Option<[Option<usize>; 2]>,
    need: Vec<bool>,
    /// Every step, ascending and descending: the substitutions of a full
    /// solution and of a right-hand side that fills every row.
    all_forward: Vec<usize>,
    all_back: Vec<usize>,
    /// The nonzero entries of C as (value, row step, column step), for
    /// the right-hand side -C x of the derivative solve.
    c_terms: Vec<(f64, usize, usize)>,
    /// dx/ds in step order after [`Plan::solve_with_derivative`], or the
    /// adjoint in row-step order after [`Plan::solve_adjoint`].
    dy: Vec<Lanes>,
}

impl Plan {
    /// The plan of an ordering of a matrix with this pattern (row-major
    /// n x n); `excited` are the rows the excitation b may fill.
    pub fn new(order: &Ordering, pattern: &[bool], excited: &[usize]) -> Plan {
        let n = order.rows.len();
        let mut step_of_row = vec![0; n];
        let mut step_of_unknown = vec![0; n];
        for t in 0..n {
            step_of_row[order.rows[t]] = t;
            step_of_unknown[order.cols[t]] = t;
        }
        let slots = Slots::new(order);
        let entries = (0..n * n)
            .filter(|&k| pattern[k])
            .map(|k| {
                let (row, col) = (k / n, k % n);
                let step = step_of_row[row];
                let slot = slots.get(step, step_of_unknown[col]);
                Entry {
                    row,
                    col,
                    slot,
                    step,
                }
            })
            .collect();
        let excited: Vec<usize> = excited.iter().map(|&row| step_of_row[row]).collect();
        let filled = slots.count();
        Plan {
            n,
            entries,
            step_of_unknown,
            row_of_step: order.rows.clone(),
            step_of_row: step_of_row.clone(),
            program: Program::new(&slots, &excited),
            slot_g: vec![0.0; filled],
            slot_c: vec![0.0; filled],
            row_g: vec![0.0; n],
            row_c: vec![0.0; n],
            rhs: vec![0.0; n],
            values: vec![Lanes::real(0.0); filled],
            inv_pivot: vec![Lanes::real(0.0); n],
            scale: vec![[0.0; LANES]; n],
            y: vec![Lanes::real(0.0); n],
            back: Vec::with_capacity(n),
            back_for: None,
            need: vec![false; n],
            all_forward: (0..n).collect(),
            all_back: (0..n).rev().collect(),
            c_terms: Vec::new(),
            dy: vec![Lanes::real(0.0); n],
        }
    }

    /// Entries of the original pattern.
    pub fn pattern_len(&self) -> usize {
        self.entries.len()
    }

    /// Entries of L + U.
    pub fn filled_len(&self) -> usize {
        self.values.len()
    }

    /// Complex multiply-adds of one factorization.
    pub fn multiply_adds(&self) -> usize {
        self.program.targets.len()
    }

    /// Loads the values of G, C and b: a copy per pattern entry.
    pub fn load(&mut self, g: &DMatrix<f64>, c: &DMatrix<f64>, b: &DVector<f64>) {
        self.row_g.fill(0.0);
        self.row_c.fill(0.0);
        for e in &self.entries {
            let (gv, cv) = (g[(e.row, e.col)], c[(e.row, e.col)]);
            self.slot_g[e.slot] = gv;
            self.slot_c[e.slot] = cv;
            self.row_g[e.step] = self.row_g[e.step].max(gv.abs());
            self.row_c[e.step] = self.row_c[e.step].max(cv.abs());
        }
        for (r, &row) in self.rhs.iter_mut().zip(&self.row_of_step) {
            *r = b[row];
        }
        self.c_terms.clear();
        for e in &self.entries {
            let cv = self.slot_c[e.slot];
            if cv != 0.0 {
                self.c_terms.push((cv, e.step, self.step_of_unknown[e.col]));
            }
        }
    }

    /// Writes the loaded G, C and b into dense storage (zeros elsewhere).
    pub fn unload(&self, g: &mut DMatrix<f64>, c: &mut DMatrix<f64>, b: &mut DVector<f64>) {
        g.fill(0.0);
        c.fill(0.0);
        for e in &self.entries {
            g[(e.row, e.col)] = self.slot_g[e.slot];
            c[(e.row, e.col)] = self.slot_c[e.slot];
        }
        for (&v, &row) in self.rhs.iter().zip(&self.row_of_step) {
            b[row] = v;
        }
    }

    /// Factors G + j omega C for each lane's omega and solves for the
    /// unknowns `wanted` (by unknown index; `None` for ground). A lane
    /// whose pivot fails the guard with threshold `guard` (the floor
    /// always applies) comes back `false`, its numbers garbage.
    pub fn solve(
        &mut self,
        omega: &[f64; LANES],
        guard: f64,
        wanted: [Option<usize>; 2],
    ) -> [bool; LANES] {
        self.factor_and_substitute(omega, guard, wanted, false)
    }

    /// [`Plan::solve`] for every unknown (read each with
    /// [`Plan::unknown`]).
    pub fn solve_all(&mut self, omega: &[f64; LANES], guard: f64) -> [bool; LANES] {
        self.factor_and_substitute(omega, guard, [None, None], true)
    }

    /// Factors, plans the back substitution for `wanted` and substitutes
    /// the excitation: for the unknowns `wanted` only, or (`all`) for
    /// every unknown, which the derivative's right-hand side needs.
    fn factor_and_substitute(
        &mut self,
        omega: &[f64; LANES],
        guard: f64,
        wanted: [Option<usize>; 2],
        all: bool,
    ) -> [bool; LANES] {
        let ok = self.factor(omega, guard);
        self.plan_back(wanted);
        self.load_rhs();
        let p = &self.program;
        let back = if all { &self.all_back } else { &self.back };
        substitute(
            p,
            &self.values,
            &self.inv_pivot,
            &mut self.y,
            &p.forward,
            back,
        );
        ok
    }

    /// [`Plan::solve`], and also the derivative of the unknowns `wanted`
    /// with respect to s = j omega from the same factors: (G + sC) x = b
    /// gives (G + sC) dx/ds = -C x, so the full solution x is substituted
    /// and one more solve with the right-hand side -C x follows (read
    /// with [`Plan::derivative`]).
    pub fn solve_with_derivative(
        &mut self,
        omega: &[f64; LANES],
        guard: f64,
        wanted: [Option<usize>; 2],
    ) -> [bool; LANES] {
        let ok = self.factor_and_substitute(omega, guard, wanted, true);
        let p = &self.program;
        self.dy.fill(Lanes::real(0.0));
        for &(cv, row, col) in &self.c_terms {
            self.dy[row].sub_assign(self.y[col].scale(cv));
        }
        substitute(
            p,
            &self.values,
            &self.inv_pivot,
            &mut self.dy,
            &self.all_forward,
            &self.back,
        );
        ok
    }

    /// Fills G + j omega C for each lane and factors it in place; lanes
    /// whose pivots fail the guard come back `false`.
    fn factor(&mut self, omega: &[f64; LANES], guard: f64) -> [bool; LANES] {
        for ((v, &g), &c) in self.values.iter_mut().zip(&self.slot_g).zip(&self.slot_c) {
            *v = Lanes::from_parts(g, c, omega);
        }
        for ((s, &g), &c) in self.scale.iter_mut().zip(&self.row_g).zip(&self.row_c) {
            *s = omega.map(|w| row_size(g, c, w));
        }
        let mut ok = [true; LANES];
        for t in 0..self.n {
            self.eliminate(t, guard, &mut ok);
        }
        ok
    }

    /// The excitation, in step order, into `y`.
    fn load_rhs(&mut self) {
        for (y, &b) in self.y.iter_mut().zip(&self.rhs) {
            *y = Lanes::real(b);
        }
    }

    /// Step t of the factorization; clears `ok` for lanes whose pivot
    /// fails the guard.
    fn eliminate(&mut self, t: usize, guard: f64, ok: &mut [bool; LANES]) {
        let p = &self.program;
        let pivot = self.values[p.pivot[t]];
        let row_scale = self.scale[t];
        let magnitude = pivot.size();
        for k in 0..LANES {
            // Written so that a NaN pivot fails too.
            ok[k] &= magnitude[k] > PIVOT_FLOOR * row_scale[k];
        }
        let inv = pivot.inv();
        self.inv_pivot[t] = inv;
        // A multiplier f = a / pivot passes when |a| / scale_a is at most
        // |pivot| / (guard scale_t): |f| guard scale_t <= scale_a.
        let limit = row_scale.map(|s| guard * s);
        let upper = &p.upper.slot[p.upper.range(t)];
        let mut next = p.target_start[t];
        for k in p.lower.range(t) {
            let slot = p.lower.slot[k];
            let f = self.values[slot].mul(inv);
            let (size, scale) = (f.size(), self.scale[p.lower.step[k]]);
            for lane in 0..LANES {
                ok[lane] &= size[lane] * limit[lane] <= scale[lane];
            }
            self.values[slot] = f;
            let row_targets = &p.targets[next..next + upper.len()];
            next += upper.len();
            for (&u, &d) in upper.iter().zip(row_targets) {
                let product = f.mul(self.values[u]);
                self.values[d].sub_assign(product);
            }
        }
    }

    /// The steps the back substitution needs for `wanted`: their own and,
    /// through U, every later step they depend on. Recomputed only when
    /// `wanted` changes (no allocation: `back` has capacity n).
    fn plan_back(&mut self, wanted: [Option<usize>; 2]) {
        if self.back_for == Some(wanted) {
            return;
        }
        self.need.fill(false);
        for u in wanted.into_iter().flatten() {
            self.need[self.step_of_unknown[u]] = true;
        }
        // Dependencies point to later steps, so one ascending pass closes.
        for t in 0..self.n {
            if self.need[t] {
                for k in self.program.upper.range(t) {
                    self.need[self.program.upper.step[k]] = true;
                }
            }
        }
        self.back.clear();
        self.back
            .extend((0..self.n).rev().filter(|&t| self.need[t]));
        self.back_for = Some(wanted);
    }

    /// Factors G + j omega C for each lane's omega and solves the
    /// transposed system (G + j omega C)^T y = e_u, the adjoint of unknown
    /// `u`: U^T q = r ascending, then L^T w = q descending, with the
    /// factors of the forward solve (read with [`Plan::adjoint`]). Lanes
    /// whose pivots fail the guard come back `false`.
    pub fn solve_adjoint(&mut self, omega: &[f64; LANES], guard: f64, u: usize) -> [bool; LANES] {
        let ok = self.factor(omega, guard);
        let p = &self.program;
        let w = &mut self.dy;
        w.fill(Lanes::real(0.0));
        w[self.step_of_unknown[u]] = Lanes::real(1.0);
        for t in 0..self.n {
            let q = w[t].mul(self.inv_pivot[t]);
            w[t] = q;
            for k in p.upper.range(t) {
                w[p.upper.step[k]].sub_assign(self.values[p.upper.slot[k]].mul(q));
            }
        }
        for t in (0..self.n).rev() {
            let mut sum = w[t];
            for k in p.lower.range(t) {
                sum.sub_assign(self.values[p.lower.slot[k]].mul(w[p.lower.step[k]]));
            }
            w[t] = sum;
        }
        ok
    }

    /// Lane `lane` of the adjoint's entry for equation `row` after
    /// [`Plan::solve_adjoint`].
    pub fn adjoint(&self, row: usize, lane: usize) -> Complex64 {
        self.dy[self.step_of_row[row]].lane(lane)
    }

    /// Lane `lane` of unknown `u` in the last solution (one of `wanted`).
    pub fn unknown(&self, u: usize, lane: usize) -> Complex64 {
        self.y[self.step_of_unknown[u]].lane(lane)
    }

    /// Lane `lane` of dx_u/ds after [`Plan::solve_with_derivative`] (`u`
    /// one of `wanted`).
    pub fn derivative(&self, u: usize, lane: usize) -> Complex64 {
        self.dy[self.step_of_unknown[u]].lane(lane)
    }
}

/// Solves with the factors in `values` and `inv_pivot` in place: `y`
/// holds the right-hand side in step order on entry. The forward
/// substitution visits the steps `forward` (ascending; the others must
/// stay zero through L), the back substitution the steps `back`
/// (descending; each with every later step it depends on).
fn substitute(
    p: &Program,
    values: &[Lanes],
    inv_pivot: &[Lanes],
    y: &mut [Lanes],
    forward: &[usize],
    back: &[usize],
) {
    for &t in forward {
        let yt = y[t];
        for k in p.lower.range(t) {
            let d = values[p.lower.slot[k]].mul(yt);
            y[p.lower.step[k]].sub_assign(d);
        }
    }
    for &t in back {
        let mut sum = y[t];
        for k in p.upper.range(t) {
            sum.sub_assign(values[p.upper.slot[k]].mul(y[p.upper.step[k]]));
        }
        y[t] = sum.mul(inv_pivot[t]);
    }
}

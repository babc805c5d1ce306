//! The sparse AC solver for one circuit solved at many frequencies and
//! with many sets of values (sweeps, Monte Carlo): the pivot sequence and
//! the fill are worked out once, and every frequency point then runs a
//! straight-line complex LU over a flat array, with no search and no
//! allocation.
//!
//! - Pattern: the union of the nonzeros of G and C, plus every op-amp's
//!   output coefficients (zero for a nullor, nonzero for a single-pole
//!   model, so a model change stays a refill).
//! - Order: Markowitz with threshold pivoting on the values at the check
//!   frequencies the caller names (see `ordering`).
//! - Program: per step, the pivot, the entries below it (multipliers),
//!   the entries right of it, and the entry each product updates.
//! - Guard: each point re-checks the threshold at run time (scaled
//!   multipliers no larger than 1 / [`GUARD_THRESHOLD`], pivots above
//!   [`PIVOT_FLOOR`] of their row). A point that fails is solved by the
//!   dense partially pivoted LU of [`AcSystem`] instead and counted.
//!
//! Invariant: `slot_g` and `slot_c` hold, per slot, the entry of G and C
//! of the circuit last loaded (zero at fill-in slots), and `row_g`,
//! `row_c` the largest |G| and |C| entry of each step's pivot row; the
//! topology (`shapes`) never changes after construction.

use std::f64::consts::TAU;

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

use super::lanes::{Lanes, LANES};
use super::layout::{has_output_resistor, Layout};
use super::lu::Lu;
use super::ordering::{markowitz, Ordering, Sample};
use super::{AcSystem, CircuitError, Element, ElementKind, Response};

/// Pivots are checked at this many log-spaced frequencies per decade of
/// the band given to [`SparseAc::new`]. Between check points the
/// Schur complements move with frequency; measured on 36 random op-amp
/// cascades over 1 Hz to 10 MHz (71 points each), the guard sent 12
/// points to the dense path with one check per decade, 4 with two, 1
/// with four.
const CHECKS_PER_DECADE: f64 = 4.0;

/// Run-time threshold: a scaled multiplier above 1 / GUARD_THRESHOLD hands
/// the point to the dense path. Looser than the selection threshold
/// (`ordering::SELECT_THRESHOLD`, 0.1) so frequencies between the check
/// points keep the sparse path while the growth stays bounded: a
/// multiplier of at most 1e2 per step, where partial pivoting allows 1.
const GUARD_THRESHOLD: f64 = 1e-2;

/// A pivot at or below this fraction of its row size hands the point to
/// the dense path: the dense LU rejects pivots below the same fraction of
/// an equilibrated row (a condition number above about 4e12), so it
/// decides whether the matrix is singular.
const PIVOT_FLOOR: f64 = 1e3 * f64::EPSILON;

/// What went wrong while building or refilling a [`SparseAc`].
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum SparseError {
    /// A band that is not 0 < from <= to, both finite.
    #[error("band {from_hz} Hz to {to_hz} Hz: need 0 < from <= to, both finite")]
    BadBand {
        /// Its lower end.
        from_hz: f64,
        /// Its upper end.
        to_hz: f64,
    },
    /// No pivot sequence has nonzero pivots at every check frequency.
    #[error("the circuit equations are singular at a frequency between {from_hz} Hz and {to_hz} Hz; give a band where the circuit can be solved")]
    SingularInBand {
        /// Lower end of the band.
        from_hz: f64,
        /// Upper end of the band.
        to_hz: f64,
    },
    /// A refill from a system with another number of elements.
    #[error("refill from a circuit of {got} elements into a solver built for {built}; build a new solver for a new circuit")]
    ElementCount {
        /// Elements of the circuit the solver was built for.
        built: usize,
        /// Elements of the system given.
        got: usize,
    },
    /// A refill from a system whose element changed kind, nodes, or
    /// between zero and non-zero output resistance.
    #[error("refill: element {index} ({name:?}) differs in kind, nodes or output resistor from the circuit the solver was built for; only values may change")]
    ElementChanged {
        /// The element index.
        index: usize,
        /// Its name in the system given.
        name: String,
    },
}

/// What fixes an element's stamp positions: everything but its values.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Shape {
    kind: ElementKind,
    nodes: [usize; 3],
    output_resistor: bool,
}

fn shape(element: &Element) -> Shape {
    let (nodes, output_resistor) = match *element {
        Element::Resistor { a, b, .. }
        | Element::Capacitor { a, b, .. }
        | Element::Inductor { a, b, .. } => ([a, b, 0], false),
        Element::VoltageSource { pos, neg, .. } => ([pos, neg, 0], false),
        Element::OpAmp {
            plus,
            minus,
            out,
            ref model,
            ..
        } => ([plus, minus, out], has_output_resistor(model)),
    };
    Shape {
        kind: element.kind(),
        nodes,
        output_resistor,
    }
}

/// The size of a row of G + j w C: between half and all of its largest
/// |entry| (|g + j w c| lies between max(|g|, w|c|) and their sum).
fn row_size(g: f64, c: f64, omega: f64) -> f64 {
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

/// Sizes of a [`SparseAc`], for reports and benchmarks.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SparseStats {
    /// Unknowns of the nodal equations.
    pub unknowns: usize,
    /// Entries of the pattern of G and C.
    pub pattern: usize,
    /// Entries of L + U (pattern plus fill-in).
    pub filled: usize,
    /// Complex multiply-adds of one factorization.
    pub multiply_adds: usize,
}

/// The sparse solver of one circuit; see the module documentation.
#[derive(Debug, Clone)]
pub struct SparseAc {
    n: usize,
    node_count: usize,
    shapes: Vec<Shape>,
    entries: Vec<Entry>,
    /// Original column of each unknown's step, inverted: unknown -> step.
    step_of_unknown: Vec<usize>,
    /// Original row of each step's pivot.
    row_of_step: Vec<usize>,
    program: Program,
    slot_g: Vec<f64>,
    slot_c: Vec<f64>,
    row_g: Vec<f64>,
    row_c: Vec<f64>,
    /// b in step order.
    rhs: Vec<f64>,
    values: Vec<Lanes>,
    inv_pivot: Vec<Lanes>,
    scale: Vec<[f64; LANES]>,
    y: Vec<Lanes>,
    dense: Dense,
    fallbacks: usize,
}

/// The dense fallback: G and C rebuilt from the slots when needed.
#[derive(Debug, Clone)]
struct Dense {
    g: DMatrix<f64>,
    c: DMatrix<f64>,
    b: DVector<f64>,
    lu: Lu,
    x: Vec<Complex64>,
}

/// The structural pattern of a system (row-major): nonzeros of G and C and
/// each op-amp's output coefficients, whose values are zero for a nullor.
fn pattern(system: &AcSystem, layout: &Layout) -> Vec<bool> {
    let n = layout.size;
    let (g, c) = (system.g(), system.c());
    let mut p: Vec<bool> = (0..n * n)
        .map(|k| g[(k / n, k % n)] != 0.0 || c[(k / n, k % n)] != 0.0)
        .collect();
    for (element, extras) in system.netlist().elements.iter().zip(&layout.extras) {
        if let (Element::OpAmp { out, .. }, Some(k)) = (element, extras.current) {
            if let Some(o) = extras.internal.or(layout.node(*out)) {
                p[k * n + o] = true;
            }
        }
    }
    p
}

/// The matrix of a system at angular frequency omega, with its row sizes.
fn sample(system: &AcSystem, omega: f64) -> Sample {
    let n = system.g().nrows();
    let (g, c) = (system.g(), system.c());
    let values = (0..n * n)
        .map(|k| Complex64::new(g[(k / n, k % n)], omega * c[(k / n, k % n)]))
        .collect();
    let peak = |m: &DMatrix<f64>, i: usize| m.row(i).iter().fold(0.0_f64, |a, v| a.max(v.abs()));
    let row_size = (0..n)
        .map(|i| row_size(peak(g, i), peak(c, i), omega))
        .collect();
    Sample { values, row_size }
}

/// [`CHECKS_PER_DECADE`] log-spaced frequencies per decade over the band,
/// both ends included; `None` for a band that is not 0 < from <= to.
fn check_points(from_hz: f64, to_hz: f64) -> Option<Vec<f64>> {
    if !(from_hz.is_finite() && to_hz.is_finite() && 0.0 < from_hz && from_hz <= to_hz) {
        return None;
    }
    let steps = ((to_hz / from_hz).log10() * CHECKS_PER_DECADE).ceil() as usize;
    let ratio = (to_hz / from_hz).powf(1.0 / steps.max(1) as f64);
    Some(
        (0..=steps)
            .map(|k| from_hz * ratio.powi(k as i32))
            .collect(),
    )
}

impl SparseAc {
    /// Builds the solver of `system`'s circuit, choosing the pivot
    /// sequence on its values at frequencies spread over the band
    /// `from_hz..=to_hz` (the intended sweep), and loads its values. Any
    /// frequency can be solved later; outside the band the guard is more
    /// likely to send points to the dense path.
    pub fn new(system: &AcSystem, from_hz: f64, to_hz: f64) -> Result<SparseAc, SparseError> {
        let checks = check_points(from_hz, to_hz).ok_or(SparseError::BadBand { from_hz, to_hz })?;
        let netlist = system.netlist();
        let layout = Layout::new(netlist);
        let n = layout.size;
        let pattern = pattern(system, &layout);
        let mut samples: Vec<Sample> = checks.iter().map(|f| sample(system, TAU * f)).collect();
        let order = markowitz(n, &pattern, &mut samples)
            .ok_or(SparseError::SingularInBand { from_hz, to_hz })?;
        let mut step_of_row = vec![0; n];
        let mut step_of_unknown = vec![0; n];
        for t in 0..n {
            step_of_row[order.rows[t]] = t;
            step_of_unknown[order.cols[t]] = t;
        }
        let slots = Slots::new(&order);
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
        let excited: Vec<usize> = netlist
            .elements
            .iter()
            .zip(&layout.extras)
            .filter(|(e, _)| e.kind() == ElementKind::VoltageSource)
            .filter_map(|(_, x)| x.current.map(|k| step_of_row[k]))
            .collect();
        let program = Program::new(&slots, &excited);
        let filled = slots.count();
        let mut solver = SparseAc {
            n,
            node_count: layout.node_count,
            shapes: netlist.elements.iter().map(shape).collect(),
            entries,
            step_of_unknown,
            row_of_step: order.rows,
            program,
            slot_g: vec![0.0; filled],
            slot_c: vec![0.0; filled],
            row_g: vec![0.0; n],
            row_c: vec![0.0; n],
            rhs: vec![0.0; n],
            values: vec![Lanes::real(0.0); filled],
            inv_pivot: vec![Lanes::real(0.0); n],
            scale: vec![[0.0; LANES]; n],
            y: vec![Lanes::real(0.0); n],
            dense: Dense {
                g: DMatrix::zeros(n, n),
                c: DMatrix::zeros(n, n),
                b: DVector::zeros(n),
                lu: Lu::new(n),
                x: vec![Complex64::new(0.0, 0.0); n],
            },
            fallbacks: 0,
        };
        solver.refill(system)?;
        Ok(solver)
    }

    /// Loads the values of `system`, which must be the circuit this solver
    /// was built for with only values (or op-amp models of the same
    /// output-resistor structure) changed: a copy per pattern entry.
    pub fn refill(&mut self, system: &AcSystem) -> Result<(), SparseError> {
        self.check_shapes(system)?;
        let (g, c) = (system.g(), system.c());
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
            *r = system.b()[row];
        }
        Ok(())
    }

    fn check_shapes(&self, system: &AcSystem) -> Result<(), SparseError> {
        let elements = &system.netlist().elements;
        if elements.len() != self.shapes.len() {
            return Err(SparseError::ElementCount {
                built: self.shapes.len(),
                got: elements.len(),
            });
        }
        match elements
            .iter()
            .zip(&self.shapes)
            .position(|(e, s)| shape(e) != *s)
        {
            Some(index) => Err(SparseError::ElementChanged {
                index,
                name: elements[index].name().to_string(),
            }),
            None => Ok(()),
        }
    }

    /// How many points so far failed the run-time guard and were solved
    /// by the dense path.
    pub fn fallbacks(&self) -> usize {
        self.fallbacks
    }

    /// Sizes of the pattern, the factors and the work per point.
    pub fn stats(&self) -> SparseStats {
        SparseStats {
            unknowns: self.n,
            pattern: self.entries.len(),
            filled: self.values.len(),
            multiply_adds: self.program.targets.len(),
        }
    }

    /// Factors G + j omega C along the program for each lane's omega;
    /// a lane whose pivot fails the guard with threshold `guard` (the
    /// floor always applies) comes back `false`, its numbers garbage.
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

    /// Solves with the factors into `y` (step order).
    fn substitute(&mut self) {
        let p = &self.program;
        for (y, &b) in self.y.iter_mut().zip(&self.rhs) {
            *y = Lanes::real(b);
        }
        for &t in &p.forward {
            let yt = self.y[t];
            for k in p.lower.range(t) {
                let d = self.values[p.lower.slot[k]].mul(yt);
                self.y[p.lower.step[k]].sub_assign(d);
            }
        }
        for t in (0..self.n).rev() {
            let mut sum = self.y[t];
            for k in p.upper.range(t) {
                sum.sub_assign(self.values[p.upper.slot[k]].mul(self.y[p.upper.step[k]]));
            }
            self.y[t] = sum.mul(self.inv_pivot[t]);
        }
    }

    /// The dense, partially pivoted solve of the loaded values into
    /// `dense.x` (unknown order); `false` if singular.
    fn dense_solve(&mut self, omega: f64) -> bool {
        let d = &mut self.dense;
        d.g.fill(0.0);
        d.c.fill(0.0);
        for e in &self.entries {
            d.g[(e.row, e.col)] = self.slot_g[e.slot];
            d.c[(e.row, e.col)] = self.slot_c[e.slot];
        }
        for (&b, &row) in self.rhs.iter().zip(&self.row_of_step) {
            d.b[row] = b;
        }
        if !d.lu.factor(&d.g, &d.c, Complex64::new(0.0, omega)) {
            return false;
        }
        for (x, &b) in d.x.iter_mut().zip(d.b.iter()) {
            *x = Complex64::new(b, 0.0);
        }
        d.lu.solve(&mut d.x);
        d.x.iter().all(|z| z.is_finite())
    }

    /// The voltage of `node` in lane `lane` of the sparse solution (0 for
    /// ground).
    fn sparse_voltage(&self, node: usize, lane: usize) -> Complex64 {
        node.checked_sub(1).map_or(Complex64::new(0.0, 0.0), |u| {
            self.y[self.step_of_unknown[u]].lane(lane)
        })
    }

    /// The voltage of `node` in the dense solution (0 for ground).
    fn dense_voltage(&self, node: usize) -> Complex64 {
        node.checked_sub(1)
            .map_or(Complex64::new(0.0, 0.0), |u| self.dense.x[u])
    }

    fn check_node(&self, node: usize, context: &str) -> Result<(), CircuitError> {
        if node < self.node_count {
            Ok(())
        } else {
            Err(CircuitError::NodeOutOfRange {
                context: context.to_string(),
                node,
                node_count: self.node_count,
            })
        }
    }

    /// V(out) / V(inp) at up to [`LANES`] frequencies at once, into `h`
    /// (as long as `freqs_hz`): one sparse pass, then the dense path for any lane the guard
    /// rejected. The frequencies are checked by the caller.
    fn solve_chunk(
        &mut self,
        freqs_hz: &[f64],
        out: usize,
        inp: usize,
        h: &mut [Complex64],
    ) -> Result<(), CircuitError> {
        // Unused lanes repeat the last frequency.
        let last = freqs_hz[freqs_hz.len() - 1];
        let omega: [f64; LANES] =
            std::array::from_fn(|k| TAU * freqs_hz.get(k).map_or(last, |f| *f));
        let ok = self.factor(&omega, GUARD_THRESHOLD);
        self.substitute();
        for (lane, (&freq_hz, h)) in freqs_hz.iter().zip(h).enumerate() {
            let sparse = (
                self.sparse_voltage(out, lane),
                self.sparse_voltage(inp, lane),
            );
            let (vout, vin) = if ok[lane] && sparse.0.is_finite() && sparse.1.is_finite() {
                sparse
            } else {
                self.fallbacks += 1;
                if !self.dense_solve(omega[lane]) {
                    return Err(CircuitError::Singular { freq_hz });
                }
                (self.dense_voltage(out), self.dense_voltage(inp))
            };
            if vin == Complex64::new(0.0, 0.0) {
                return Err(CircuitError::ZeroVoltage { node: inp, freq_hz });
            }
            *h = vout / vin;
        }
        Ok(())
    }

    /// Checks the nodes and frequencies of a solve.
    fn check(&self, freqs_hz: &[f64], out: usize, inp: usize) -> Result<(), CircuitError> {
        if let Some(&freq_hz) = freqs_hz.iter().find(|f| !(f.is_finite() && **f >= 0.0)) {
            return Err(CircuitError::BadFrequency { freq_hz });
        }
        self.check_node(out, "output")?;
        self.check_node(inp, "input")
    }

    /// V(out) / V(inp) at one frequency, as [`AcSystem::transfer`] gives
    /// it (same errors). Allocates nothing.
    pub fn transfer(
        &mut self,
        freq_hz: f64,
        out: usize,
        inp: usize,
    ) -> Result<Complex64, CircuitError> {
        let mut h = [Complex64::new(0.0, 0.0)];
        self.check(&[freq_hz], out, inp)?;
        self.solve_chunk(&[freq_hz], out, inp, &mut h)?;
        Ok(h[0])
    }

    /// [`SparseAc::transfer`] at each frequency into `h` (cleared first;
    /// allocates nothing once `h` has the capacity), [`LANES`]
    /// frequencies per pass.
    pub fn sweep_into(
        &mut self,
        freqs_hz: &[f64],
        out: usize,
        inp: usize,
        h: &mut Vec<Complex64>,
    ) -> Result<(), CircuitError> {
        h.clear();
        self.check(freqs_hz, out, inp)?;
        h.resize(freqs_hz.len(), Complex64::new(0.0, 0.0));
        for (chunk, h) in freqs_hz.chunks(LANES).zip(h.chunks_mut(LANES)) {
            self.solve_chunk(chunk, out, inp, h)?;
        }
        Ok(())
    }

    /// [`SparseAc::transfer`] at each frequency, as a [`Response`].
    pub fn sweep(
        &mut self,
        freqs_hz: &[f64],
        out: usize,
        inp: usize,
    ) -> Result<Response, CircuitError> {
        let mut h = Vec::with_capacity(freqs_hz.len());
        self.sweep_into(freqs_hz, out, inp, &mut h)?;
        Ok(Response {
            freq_hz: freqs_hz.to_vec(),
            h,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::circuit::{reference_transfer, Netlist};

    /// R1 from the source into node a, which also feeds a resistive
    /// triangle (so eliminating a is expensive), and C1 from a into a
    /// lossless tank L1 || C2 at node m. Series C1 and the tank short a to
    /// ground at w0 = 1 / sqrt(L1 (C1 + C2)).
    const R1: f64 = 1e3;
    const C1: f64 = 100e-9;

    fn series_resonance() -> (Netlist, f64) {
        let (r, c1, c2, l) = (R1, C1, 10e-9, 10e-3);
        let mut n = Netlist::new("series resonance");
        let [inp, a, b1, b2, m] = ["in", "a", "b1", "b2", "m"].map(|s| n.node(s));
        let two = |name: &str, a, b, v: f64| {
            let name = name.to_string();
            match name.as_bytes()[0] {
                b'R' => Element::Resistor { name, a, b, ohm: v },
                b'C' => Element::Capacitor {
                    name,
                    a,
                    b,
                    farad: v,
                },
                _ => Element::Inductor {
                    name,
                    a,
                    b,
                    henry: v,
                },
            }
        };
        let elements = [
            Element::VoltageSource {
                name: "V1".into(),
                pos: inp,
                neg: 0,
                ac_volt: 1.0,
            },
            two("R1", inp, a, r),
            two("R2", a, b1, r),
            two("R3", a, b2, r),
            two("R4", b1, b2, r),
            two("R5", b1, 0, r),
            two("R6", b2, 0, r),
            two("C1", a, m, c1),
            two("C2", m, 0, c2),
            two("L1", m, 0, l),
        ];
        for e in elements {
            n.add(e).unwrap();
        }
        (n, 1.0 / (TAU * (l * (c1 + c2)).sqrt()))
    }

    #[test]
    fn a_static_order_can_meet_an_exactly_zero_pivot() {
        // Pivots checked at 1 MHz eliminate the inductor current first and
        // then node m, whose reduced diagonal j(w (C1 + C2) - 1/(w L1))
        // vanishes at w0: no run of this program can solve that point,
        // whatever the threshold, so the dense path must take it.
        let (netlist, f0) = series_resonance();
        let system = AcSystem::new(&netlist).unwrap();
        let mut sparse = SparseAc::new(&system, 1e6, 1e6).unwrap();
        assert!(
            !sparse.factor(&[TAU * f0; LANES], 0.0)[0],
            "pivot survived at w0"
        );
        let checked = sparse.factor(&[TAU * 1e6; LANES], GUARD_THRESHOLD);
        assert!(checked[0], "check point");
        // At w0 node a is grounded, so the source current is V1 / R1 and
        // V(m) = -(V1 / R1) / (j w0 C1) (closed form), and the oracle.
        let (inp, m) = (1, 5);
        let got = sparse.transfer(f0, m, inp).unwrap();
        let closed = Complex64::new(0.0, 1.0 / (TAU * f0 * R1 * C1));
        let oracle = reference_transfer(&netlist, f0, m, inp).unwrap();
        // Rounding of w0 itself moves V(m) by about eps relative (its
        // slope in w is O(1) relative), the solve by a few eps more.
        const TOL: f64 = 1e-12;
        assert!(
            (got - closed).norm() <= TOL * closed.norm(),
            "{got} vs {closed}"
        );
        assert!(
            (got - oracle).norm() <= TOL * oracle.norm(),
            "{got} vs {oracle}"
        );
        assert_eq!(sparse.fallbacks(), 1);
        sparse.transfer(1e6, m, inp).unwrap();
        assert_eq!(sparse.fallbacks(), 1, "the check point stays sparse");
    }
}

//! The sparse AC solver for one circuit solved at many frequencies and
//! with many sets of values (sweeps, Monte Carlo): pivot orders and their
//! fill are worked out once, and every frequency point then runs a
//! straight-line complex LU over a flat array ([`LANES`] points per
//! pass), with no search and no allocation.
//!
//! - Pattern: the union of the nonzeros of G and C, plus every op-amp's
//!   gain-row coefficients (zero for a nullor, nonzero for a single-pole
//!   model, so a model change stays a refill).
//! - Order: Markowitz with threshold pivoting on the values at check
//!   frequencies spread over the caller's band (see `ordering`).
//! - Program: per step, the pivot, the entries below it (multipliers),
//!   the entries right of it, and the entry each product updates (see
//!   `plan`).
//! - Scan: where a pivot vanishes inside the band (a transmission zero
//!   shorts a node, so the reduced diagonal of that node passes through
//!   zero), a scan of the band at construction finds the weak
//!   neighbourhood, and the order is chosen again with those frequencies
//!   among the check points.
//! - Regional orders: where no single order serves the whole band (on
//!   the floating-GIC build of an 11th-order bandstop from 1 Hz to
//!   9.2 kHz the best one failed the guard at 43 of the 180 passband
//!   points, all between 0.1 and 0.6 Hz, and the dense path made a
//!   `bom` run take 9 s), further orders are chosen on the failing
//!   stretches alone; a point tries the orders in turn.
//! - Guard: each point re-checks the threshold at run time (scaled
//!   multipliers no larger than 1 / `GUARD_THRESHOLD`, pivots above a
//!   floor of their row); a point that fails is solved by the dense
//!   partially pivoted LU of [`AcSystem`] and counted.
//! - Group delay ([`SparseAc::sweep_delay_into`]): exact, from the same
//!   factors by one more solve, dx/ds = -A^-1 C x; at an exact zero of
//!   V(out) the dense path gives the limit (see [`DenseDelay`]).
//!
//! Invariant: the plan holds the values of the circuit last loaded; the
//! topology (`shapes`) never changes after construction.

use std::f64::consts::TAU;

use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

use super::delay::{point_error, DenseDelay, PointFailure};
use super::lanes::LANES;
use super::layout::{Layout, OpAmpUnknowns};
use super::lu::Lu;
use super::ordering::{markowitz, Sample};
use super::plan::{row_size, Plan, GUARD_THRESHOLD};
use super::{AcSystem, CircuitError, Element, ElementKind, Response, RESONANCE_STEP};

/// Pivots are checked at this many log-spaced frequencies per decade of
/// the band given to [`SparseAc::new`]. Between check points the
/// Schur complements move with frequency; measured on 36 random op-amp
/// cascades over 1 Hz to 10 MHz (71 points each), the guard sent 12
/// points to the dense path with one check per decade, 4 with two, 1
/// with four (before the band scan existed).
const CHECKS_PER_DECADE: f64 = 4.0;

/// After the first order is chosen, the band is scanned at this many
/// points per decade for weak points: where some scaled multiplier
/// exceeds 1 / [`SCAN_THRESHOLD`]. Weak points join the check points and
/// the order is chosen again. A transmission zero shorts a node, so the
/// reduced diagonal of that node passes through zero: on the FDNR
/// benchmark network the guard fails within about 0.5 % of each zero
/// (one or two of the sweep's 1,000 points, 0.7 % apart), and the weak
/// neighbourhood at the scan threshold is about three times wider; 128
/// per decade puts scan points 1.8 % apart.
const SCAN_PER_DECADE: f64 = 128.0;

/// See [`SCAN_PER_DECADE`]: three times the run-time guard's threshold,
/// so the scan sees the neighbourhood in which the guard will fail
/// before the guard does.
const SCAN_THRESHOLD: f64 = 3.0 * GUARD_THRESHOLD;

/// Rounds of scanning and choosing again, at most.
const MAX_REORDERS: usize = 3;

/// Weak points added per run of consecutive weak scan points, at most
/// (spread over the run).
const WEAK_SAMPLES: usize = 4;

/// Orders chosen for stretches of the band the first order fails, at
/// most (see the module documentation).
const MAX_REGIONAL: usize = 3;

/// Check points of a regional order per run of failing scan points, at
/// most (spread over the run): about 10 per decade over the 0.1-0.6 Hz
/// stretch of the bandstop in the module documentation (against
/// [`CHECKS_PER_DECADE`]'s 4), where its regional order then passes the
/// guard at every passband point (tests/fast.rs,
/// `regional_orders_keep_a_wide_bandstop_on_the_sparse_path`).
const REGIONAL_SAMPLES: usize = 8;

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
    /// A refill from a system whose element changed kind, nodes, between
    /// zero and non-zero output resistance, or to or from a two-pole model.
    #[error("refill: element {index} ({name:?}) differs in kind, nodes, output resistor or second pole from the circuit the solver was built for; only values may change")]
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
    /// An op-amp's own unknowns (none for other elements).
    opamp: Option<OpAmpUnknowns>,
}

fn shape(element: &Element) -> Shape {
    let (nodes, opamp) = match *element {
        Element::Resistor { a, b, .. }
        | Element::Capacitor { a, b, .. }
        | Element::Inductor { a, b, .. } => ([a, b, 0], None),
        Element::VoltageSource { pos, neg, .. } => ([pos, neg, 0], None),
        Element::OpAmp {
            plus,
            minus,
            out,
            ref model,
            ..
        } => ([plus, minus, out], Some(OpAmpUnknowns::of(model))),
    };
    Shape {
        kind: element.kind(),
        nodes,
        opamp,
    }
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
            // The unknown the gain row acts on (see `mna::stamps`).
            if let Some(o) = extras.pole.or(extras.internal).or(layout.node(*out)) {
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

/// `per_decade` log-spaced frequencies per decade over the band, both
/// ends included; `None` for a band that is not 0 < from <= to.
fn band_points(from_hz: f64, to_hz: f64, per_decade: f64) -> Option<Vec<f64>> {
    if !(from_hz.is_finite() && to_hz.is_finite() && 0.0 < from_hz && from_hz <= to_hz) {
        return None;
    }
    let steps = ((to_hz / from_hz).log10() * per_decade).ceil() as usize;
    let ratio = (to_hz / from_hz).powf(1.0 / steps.max(1) as f64);
    Some(
        (0..=steps)
            .map(|k| from_hz * ratio.powi(k as i32))
            .collect(),
    )
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

/// The dense fallback: G, C and b rebuilt from the plan's slots, and the
/// dense solver.
#[derive(Debug, Clone)]
struct Dense {
    g: DMatrix<f64>,
    c: DMatrix<f64>,
    b: DVector<f64>,
    solver: DenseDelay,
    /// The dense LU of the adjoint's fallback.
    lu: Lu,
}

/// The sparse solver of one circuit; see the module documentation.
#[derive(Debug, Clone)]
pub struct SparseAc {
    n: usize,
    node_count: usize,
    shapes: Vec<Shape>,
    /// The order chosen over the whole band, then the regional orders;
    /// all hold the same values.
    plans: Vec<Plan>,
    dense: Dense,
    fallbacks: usize,
}

impl SparseAc {
    /// Builds the solver of `system`'s circuit, choosing the pivot
    /// sequence on its values at frequencies spread over the band
    /// `from_hz..=to_hz` (the intended sweep), adding rescue orders where
    /// a scan of the band finds the first one failing, and loads its
    /// values. Any frequency can be solved later; outside the band the
    /// dense path is more likely to be needed.
    pub fn new(system: &AcSystem, from_hz: f64, to_hz: f64) -> Result<SparseAc, SparseError> {
        let bad = SparseError::BadBand { from_hz, to_hz };
        let checks = band_points(from_hz, to_hz, CHECKS_PER_DECADE).ok_or(bad.clone())?;
        let scan = band_points(from_hz, to_hz, SCAN_PER_DECADE).ok_or(bad)?;
        let netlist = system.netlist();
        let layout = Layout::new(netlist);
        let n = layout.size;
        let pattern = pattern(system, &layout);
        let excited: Vec<usize> = netlist
            .elements
            .iter()
            .zip(&layout.extras)
            .filter(|(e, _)| e.kind() == ElementKind::VoltageSource)
            .filter_map(|(_, x)| x.current)
            .collect();
        let order_at = |freqs: &[f64]| {
            let mut samples: Vec<Sample> = freqs.iter().map(|f| sample(system, TAU * f)).collect();
            let order = markowitz(n, &pattern, &mut samples)?;
            let mut plan = Plan::new(&order, &pattern, &excited);
            plan.load(system.g(), system.c(), system.b());
            Some(plan)
        };
        let singular = SparseError::SingularInBand { from_hz, to_hz };
        let mut samples = checks;
        let mut plan = order_at(&samples).ok_or(singular)?;
        for _ in 0..MAX_REORDERS {
            let weak = weak_points(&mut plan, &scan, SCAN_THRESHOLD);
            if weak.is_empty() {
                break;
            }
            samples.extend(
                runs(&weak)
                    .flat_map(|r| spread(r, WEAK_SAMPLES))
                    .map(|k| scan[k]),
            );
            let Some(mut next) = order_at(&samples) else {
                break;
            };
            // Keep the new order only if the run-time guard fails no more
            // often over the scan.
            let failures = |plan: &mut Plan| weak_points(plan, &scan, GUARD_THRESHOLD).len();
            if failures(&mut next) > failures(&mut plan) {
                break;
            }
            plan = next;
        }
        let plans = regional_orders(plan, &scan, order_at);
        Ok(SparseAc {
            n,
            node_count: layout.node_count,
            shapes: netlist.elements.iter().map(shape).collect(),
            plans,
            dense: Dense {
                g: DMatrix::zeros(n, n),
                c: DMatrix::zeros(n, n),
                b: DVector::zeros(n),
                solver: DenseDelay::with_size(n),
                lu: Lu::new(n),
            },
            fallbacks: 0,
        })
    }

    /// Loads the values of `system`, which must be the circuit this solver
    /// was built for with only values (or op-amp models with the same
    /// unknowns) changed: a copy per pattern entry and
    /// order.
    pub fn refill(&mut self, system: &AcSystem) -> Result<(), SparseError> {
        self.check_shapes(system)?;
        for plan in &mut self.plans {
            plan.load(system.g(), system.c(), system.b());
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

    /// How many points so far no sparse order could solve, so the dense
    /// path did. (The delay limit at an exact zero of V(out), which also
    /// takes the dense path, is not counted: the sparse solve passed.)
    pub fn fallbacks(&self) -> usize {
        self.fallbacks
    }

    /// Sizes of the pattern, the factors and the work per point, of the
    /// order chosen over the whole band.
    pub fn stats(&self) -> SparseStats {
        let plan = &self.plans[0];
        SparseStats {
            unknowns: self.n,
            pattern: plan.pattern_len(),
            filled: plan.filled_len(),
            multiply_adds: plan.multiply_adds(),
        }
    }

    /// How many orders the solver holds: one for the whole band, plus one
    /// per stretch of it that order fails (see the module documentation).
    pub fn orders(&self) -> usize {
        self.plans.len()
    }

    /// The dense, partially pivoted transfer (and delay, when asked
    /// for) of the loaded values at one point ([`DenseDelay::point`]).
    fn dense_point(
        &mut self,
        omega: f64,
        unknowns: [Option<usize>; 2],
        delay: Option<bool>,
    ) -> Result<(Complex64, f64), PointFailure> {
        let d = &mut self.dense;
        self.plans[0].unload(&mut d.g, &mut d.c, &mut d.b);
        d.solver.point(&d.g, &d.c, &d.b, omega, unknowns, delay)
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

    /// Solves the lanes of `omega` by each order in turn until every
    /// lane in `0..lanes` has passed the guard, reading each passing lane
    /// once with `read(plan, lane)` (which says whether its numbers are
    /// usable); `None` for a lane no order could solve.
    fn solve_lanes<T: Copy>(
        &mut self,
        omega: &[f64; LANES],
        lanes: usize,
        solve: impl Fn(&mut Plan, &[f64; LANES]) -> [bool; LANES],
        read: impl Fn(&Plan, usize) -> Option<T>,
    ) -> [Option<T>; LANES] {
        let mut got = [None; LANES];
        for plan in &mut self.plans {
            if got[..lanes].iter().all(Option::is_some) {
                break;
            }
            let ok = solve(plan, omega);
            for (k, got) in got[..lanes].iter_mut().enumerate() {
                if ok[k] && got.is_none() {
                    *got = read(plan, k);
                }
            }
        }
        got
    }

    /// V(out) / V(inp) at up to [`LANES`] frequencies at once, into `h`
    /// (as long as `freqs_hz`): sparse passes (one per order needed),
    /// then the dense path for any lane every order's guard rejected. The
    /// frequencies are checked by the caller.
    fn solve_chunk(
        &mut self,
        freqs_hz: &[f64],
        out: usize,
        inp: usize,
        h: &mut [Complex64],
    ) -> Result<(), CircuitError> {
        let omega = lane_omegas(freqs_hz);
        let unknowns = [out.checked_sub(1), inp.checked_sub(1)];
        let got = self.solve_lanes(
            &omega,
            freqs_hz.len(),
            |plan, omega| plan.solve(omega, GUARD_THRESHOLD, unknowns),
            |plan, k| {
                let v =
                    unknowns.map(|u| u.map_or(Complex64::new(0.0, 0.0), |u| plan.unknown(u, k)));
                v.iter().all(|z| z.is_finite()).then_some(v)
            },
        );
        for (((k, &freq_hz), h), got) in freqs_hz.iter().enumerate().zip(h).zip(got) {
            let [vout, vin] = if let Some(v) = got {
                v
            } else {
                self.fallbacks += 1;
                *h = self
                    .dense_point(omega[k], unknowns, None)
                    .map_err(|f| point_error(f, freq_hz, [out, inp]))?
                    .0;
                continue;
            };
            if vin == Complex64::new(0.0, 0.0) {
                return Err(CircuitError::ZeroVoltage { node: inp, freq_hz });
            }
            *h = vout / vin;
        }
        Ok(())
    }

    /// [`SparseAc::solve_chunk`] with the group delay of each point into
    /// `delay_s`: one sparse pass that also solves for dx/ds, then the
    /// dense path for lanes the guard rejected and for the delay where
    /// V(out) is exactly zero (or so small its log-derivative overflows).
    fn solve_chunk_delay(
        &mut self,
        freqs_hz: &[f64],
        out: usize,
        inp: usize,
        h: &mut [Complex64],
        delay_s: &mut [f64],
    ) -> Result<(), CircuitError> {
        const ZERO: Complex64 = Complex64::new(0.0, 0.0);
        let omega = lane_omegas(freqs_hz);
        let unknowns = [out.checked_sub(1), inp.checked_sub(1)];
        let got = self.solve_lanes(
            &omega,
            freqs_hz.len(),
            |plan, omega| plan.solve_with_derivative(omega, GUARD_THRESHOLD, unknowns),
            |plan, k| {
                let at = |read: &dyn Fn(usize) -> Complex64| unknowns.map(|u| u.map_or(ZERO, read));
                let [vout, vin] = at(&|u| plan.unknown(u, k));
                let [dout, din] = at(&|u| plan.derivative(u, k));
                let v = [vout, vin, dout, din];
                v.iter().all(|z| z.is_finite()).then_some(v)
            },
        );
        for (k, &freq_hz) in freqs_hz.iter().enumerate() {
            let sparse_ok = got[k].is_some();
            let [vout, vin, dout, din] = got[k].unwrap_or([ZERO; 4]);
            if sparse_ok && vin != ZERO {
                let delay = -(dout / vout - din / vin).re;
                if vout != ZERO && delay.is_finite() {
                    h[k] = vout / vin;
                    delay_s[k] = delay;
                    continue;
                }
            }
            // The dense path: a rejected lane, V(in) = 0 (an error either
            // way), or the limit at a zero of V(out).
            if !sparse_ok {
                self.fallbacks += 1;
            }
            // Where the sparse solve passed and found V(out) = 0, the
            // dense one must not see rounding residue as a value.
            let at_zero = sparse_ok && vout == ZERO;
            (h[k], delay_s[k]) = self
                .dense_point(omega[k], unknowns, Some(at_zero))
                .map_err(|f| point_error(f, freq_hz, [out, inp]))?;
        }
        Ok(())
    }

    /// The adjoint of node `out` at each of `freqs_hz`: y solving
    /// (G + j 2 pi f C)^T y = e_out, so that a current i injected into
    /// node n adds y_n i to V(out), and a source e in the right-hand side
    /// of equation r adds y_r e (one transposed solve gives the transfer
    /// from every source at once; see [`AcSystem::opamp_row`]). `visit`
    /// gets each point's index and y, indexed by equation (like the rows
    /// of [`AcSystem::g`]). Sparse passes of [`LANES`] points, the dense
    /// path for a lane no order solves.
    pub fn adjoint_sweep(
        &mut self,
        freqs_hz: &[f64],
        out: usize,
        visit: impl FnMut(usize, &[Complex64]),
    ) -> Result<(), CircuitError> {
        self.check(freqs_hz, out, out)?;
        let Some(u) = out.checked_sub(1) else {
            return Err(CircuitError::ZeroVoltage {
                node: out,
                freq_hz: freqs_hz.first().copied().unwrap_or(0.0),
            });
        };
        self.vector_sweep(
            freqs_hz,
            |plan, omega| plan.solve_adjoint(omega, GUARD_THRESHOLD, u),
            |plan, row, k| plan.adjoint(row, k),
            |d, f, y| {
                y.fill(Complex64::new(0.0, 0.0));
                y[u] = Complex64::new(1.0, 0.0);
                if !d.lu.factor(&d.g, &d.c, Complex64::new(0.0, TAU * f)) {
                    return false;
                }
                d.lu.solve_transposed(y);
                true
            },
            visit,
        )
    }

    /// The whole solution x of (G + j 2 pi f C) x = b at each of
    /// `freqs_hz`: `visit` gets each point's index and x, indexed by
    /// unknown (node n at n - 1). One factorization per point serves every
    /// node, where [`SparseAc::sweep_into`] factors once per node read.
    /// Sparse passes of [`LANES`] points, the dense path for a lane no
    /// order solves.
    pub fn solution_sweep(
        &mut self,
        freqs_hz: &[f64],
        visit: impl FnMut(usize, &[Complex64]),
    ) -> Result<(), CircuitError> {
        self.check(freqs_hz, 0, 0)?;
        self.vector_sweep(
            freqs_hz,
            |plan, omega| plan.solve_all(omega, GUARD_THRESHOLD),
            |plan, u, k| plan.unknown(u, k),
            |d, f, x| {
                for (v, &b) in x.iter_mut().zip(d.b.iter()) {
                    *v = Complex64::new(b, 0.0);
                }
                if !d.lu.factor(&d.g, &d.c, Complex64::new(0.0, TAU * f)) {
                    return false;
                }
                d.lu.solve(x);
                true
            },
            visit,
        )
    }

    /// One whole vector per point of `freqs_hz` to `visit`: `solve` on
    /// each order's plan in passes of [`LANES`] points, `read(plan, index,
    /// lane)` for each entry of a passing lane, and `dense(fallback, f,
    /// vector)` (false where singular) for a lane no order solves or whose
    /// numbers are not finite. Across a lossless resonance (a passive
    /// ideal's tank at its own frequency), where the dense matrix is
    /// singular, the mean of the two sides, as `AcSystem::transfer` takes
    /// it.
    fn vector_sweep(
        &mut self,
        freqs_hz: &[f64],
        solve: impl Fn(&mut Plan, &[f64; LANES]) -> [bool; LANES],
        read: impl Fn(&Plan, usize, usize) -> Complex64,
        dense: impl Fn(&mut Dense, f64, &mut [Complex64]) -> bool,
        mut visit: impl FnMut(usize, &[Complex64]),
    ) -> Result<(), CircuitError> {
        let n = self.n;
        let mut v = vec![Complex64::new(0.0, 0.0); n];
        for (chunk_index, chunk) in freqs_hz.chunks(LANES).enumerate() {
            let omega = lane_omegas(chunk);
            let mut done = [false; LANES];
            for plan in &mut self.plans {
                if done[..chunk.len()].iter().all(|&d| d) {
                    break;
                }
                let ok = solve(plan, &omega);
                for k in 0..chunk.len() {
                    if ok[k] && !done[k] {
                        for (i, x) in v.iter_mut().enumerate() {
                            *x = read(plan, i, k);
                        }
                        if v.iter().all(|x| x.is_finite()) {
                            done[k] = true;
                            visit(chunk_index * LANES + k, &v);
                        }
                    }
                }
            }
            for k in (0..chunk.len()).filter(|&k| !done[k]) {
                self.fallbacks += 1;
                let freq_hz = chunk[k];
                let d = &mut self.dense;
                self.plans[0].unload(&mut d.g, &mut d.c, &mut d.b);
                let mut at =
                    |f: f64, v: &mut [Complex64]| dense(d, f, v) && v.iter().all(|x| x.is_finite());
                if !at(freq_hz, &mut v) {
                    let mut above = vec![Complex64::new(0.0, 0.0); n];
                    let sides = freq_hz > 0.0
                        && at(freq_hz * (1.0 - RESONANCE_STEP), &mut v)
                        && at(freq_hz * (1.0 + RESONANCE_STEP), &mut above);
                    if !sides {
                        return Err(CircuitError::Singular { freq_hz });
                    }
                    for (x, a) in v.iter_mut().zip(&above) {
                        *x = (*x + a) / 2.0;
                    }
                }
                visit(chunk_index * LANES + k, &v);
            }
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

    /// V(out) / V(inp) and its group delay, seconds, at one frequency
    /// (see [`SparseAc::sweep_delay_into`]).
    pub fn transfer_delay(
        &mut self,
        freq_hz: f64,
        out: usize,
        inp: usize,
    ) -> Result<(Complex64, f64), CircuitError> {
        let (mut h, mut delay) = ([Complex64::new(0.0, 0.0)], [0.0]);
        self.check(&[freq_hz], out, inp)?;
        self.solve_chunk_delay(&[freq_hz], out, inp, &mut h, &mut delay)?;
        Ok((h[0], delay[0]))
    }

    /// [`SparseAc::sweep_into`] with the group delay -d arg H / d omega
    /// of each point, seconds, into `delay_s` (cleared first): exact up to
    /// rounding, as [`AcSystem::group_delay`] computes it (dx/ds =
    /// -A^-1 C x by one more solve with the same factors, tau =
    /// -Re(d ln H / ds)). Where V(out) is exactly zero, the delay is its
    /// limit on either side, which is finite (see [`DenseDelay`]); where
    /// V(out) vanishes identically, [`CircuitError::ZeroVoltage`] of
    /// `out`. Every value is finite.
    pub fn sweep_delay_into(
        &mut self,
        freqs_hz: &[f64],
        out: usize,
        inp: usize,
        h: &mut Vec<Complex64>,
        delay_s: &mut Vec<f64>,
    ) -> Result<(), CircuitError> {
        h.clear();
        delay_s.clear();
        self.check(freqs_hz, out, inp)?;
        h.resize(freqs_hz.len(), Complex64::new(0.0, 0.0));
        delay_s.resize(freqs_hz.len(), 0.0);
        for ((chunk, h), d) in freqs_hz
            .chunks(LANES)
            .zip(h.chunks_mut(LANES))
            .zip(delay_s.chunks_mut(LANES))
        {
            self.solve_chunk_delay(chunk, out, inp, h, d)?;
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

/// Angular frequencies of up to [`LANES`] points; unused lanes repeat
/// the last one.
fn lane_omegas(freqs_hz: &[f64]) -> [f64; LANES] {
    let last = freqs_hz[freqs_hz.len() - 1];
    std::array::from_fn(|k| TAU * freqs_hz.get(k).map_or(last, |f| *f))
}

/// Indices of the scan points at which `plan` fails the guard with
/// threshold `guard`.
fn weak_points(plan: &mut Plan, scan: &[f64], guard: f64) -> Vec<usize> {
    let mut weak = Vec::new();
    for (c, chunk) in scan.chunks(LANES).enumerate() {
        let ok = plan.solve(&lane_omegas(chunk), guard, [None, None]);
        weak.extend((0..chunk.len()).filter(|&k| !ok[k]).map(|k| c * LANES + k));
    }
    weak
}

/// `first` (the order chosen over the whole band), then up to
/// [`MAX_REGIONAL`] orders chosen by `order_at` on the stretches of the
/// scan that the orders before them fail at the run-time guard, each
/// kept only if it solves some of them.
fn regional_orders(
    first: Plan,
    scan: &[f64],
    order_at: impl Fn(&[f64]) -> Option<Plan>,
) -> Vec<Plan> {
    let mut plans = vec![first];
    let mut failing: Vec<f64> = weak_points(&mut plans[0], scan, GUARD_THRESHOLD)
        .into_iter()
        .map(|k| scan[k])
        .collect();
    while !failing.is_empty() && plans.len() <= MAX_REGIONAL {
        // Runs of the failing points, as indices into the scan.
        let at: Vec<usize> = failing
            .iter()
            .map(|f| scan.partition_point(|s| s < f))
            .collect();
        let checks: Vec<f64> = runs(&at)
            .flat_map(|r| {
                let offset = at.partition_point(|&k| k < r.start);
                spread(offset..offset + r.len(), REGIONAL_SAMPLES)
            })
            .map(|i| failing[i])
            .collect();
        let Some(mut regional) = order_at(&checks) else {
            break;
        };
        let still = weak_points(&mut regional, &failing, GUARD_THRESHOLD);
        if still.len() == failing.len() {
            break;
        }
        failing = still.into_iter().map(|i| failing[i]).collect();
        plans.push(regional);
    }
    plans
}

/// The runs of consecutive indices in an ascending list.
fn runs(indices: &[usize]) -> impl Iterator<Item = std::ops::Range<usize>> + '_ {
    let mut rest = indices;
    std::iter::from_fn(move || {
        let &start = rest.first()?;
        let len = rest
            .iter()
            .enumerate()
            .take_while(|&(i, &k)| k == start + i)
            .count();
        rest = &rest[len..];
        Some(start..start + len)
    })
}

/// At most `count` indices spread evenly over `run`, both ends included.
fn spread(run: std::ops::Range<usize>, count: usize) -> impl Iterator<Item = usize> {
    let len = run.len();
    let picks = len.min(count);
    (0..picks).map(move |i| {
        run.start
            + if picks > 1 {
                i * (len - 1) / (picks - 1)
            } else {
                0
            }
    })
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
        let first = &mut sparse.plans[0];
        let at_zero = first.solve(&[TAU * f0; LANES], 0.0, [None, None]);
        assert!(!at_zero[0], "pivot survived at w0");
        let checked = first.solve(&[TAU * 1e6; LANES], GUARD_THRESHOLD, [None, None]);
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

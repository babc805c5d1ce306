//! The stability verdict of a netlist from its natural frequencies: the
//! roots of det(G + sC) with every source set to zero.
//!
//! The roots come from the eigenvalues of a reduced matrix (see
//! [`reduced_roots`]) rather than from [`AcSystem::natural_frequencies`]:
//! that one works on every unknown, and the hundreds of infinite roots of
//! a build with 50 op-amps or more (one per op-amp current, source row or
//! resistive node) stalled its QR iteration, while the reduced matrix
//! holds only the unknowns the capacitors and op-amp poles act on
//! (measured on 420 builds of the fixture designs with GBW from 1 to
//! 10 MHz: no failure, and agreement with the circuit module's roots to
//! 4e-5 relative wherever that one converged).
//!
//! A group of nodes that only capacitors join to the rest of the circuit
//! (no resistor, inductor, source or op-amp output leads from it to
//! ground) and that no op-amp input watches keeps its total charge: that
//! is an exact natural frequency at s = 0 which no source excites and no
//! output sees (the passive ideal of an elliptic highpass has one between
//! its series capacitors). Such charge modes are counted from the
//! topology and set aside, one root nearest the origin each; every other
//! root decides.
//!
//! A circuit is called stable when every other natural frequency lies
//! strictly inside the left half plane by a relative margin:
//! Re(s) < -margin |s|. The margin keeps a root that rounding has moved
//! off the imaginary axis (a lossless resonance) from passing as stable.

use nalgebra::DMatrix;
use num_complex::Complex64;

use super::error::ActiveError;
use crate::circuit::{AcSystem, CircuitError, Element, Netlist, OpAmpModel, Terminal};

/// Relative margin of [`StabilityVerdict::stable`]. The roots come from a
/// shifted eigenvalue problem accurate to about 1e-10 of |s| on the
/// circuit module's closed-form checks; 1e-9 sits above that noise and far
/// below the damping of any pole of a realizable filter (a pole Q of 1e4
/// has Re(s) = -5e-5 |s|).
pub const STABILITY_MARGIN: f64 = 1e-9;

/// Eigenvalues of the reduced matrix below this fraction of the largest
/// count as zero (roots at infinity), as in the circuit module, whose
/// measurements put zero eigenvalues at most 4e-15 of the largest and
/// finite ones above 1.7e-6.
const ZERO_EIGENVALUE: f64 = 1e-12;

/// Shifts sigma tried in turn, as multiples of |G| / |C| of the network
/// scaled to a mean resistance of 1 ohm (where |G| / |C| sits near the
/// filter's band, the capacitors dominating C); the first that converges
/// is used. The shift maps every root s to the eigenvalue 1/(sigma - s),
/// so roots far above sigma shrink towards the zero eigenvalues, and a
/// shift amid the filter's poles stalled nalgebra's QR iteration, used
/// before faer's (measured on
/// 210 builds of the fixture designs, GBW 1 to 7 MHz: 7 % failed at
/// |G|/|C|, none at 1e-2 of it or below). Fast roots stay well inside the
/// ZERO_EIGENVALUE range: at 1e-4 of the band scale a root at 1e9 rad/s
/// (GBW 100 MHz and more) is still 1e-10 of the largest eigenvalue, even
/// with a root at 0.
const SHIFT_FACTORS: [f64; 6] = [1e-2, 1e-3, 1e-1, 1e-4, 1.0, 10.0];

/// A natural frequency as a designer reads it.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct NaturalFrequency {
    /// Real part, rad/s (negative: decaying).
    pub re_rad_s: f64,
    /// Imaginary part, rad/s.
    pub im_rad_s: f64,
    /// |s| / 2 pi, Hz: the undamped natural frequency.
    pub frequency_hz: f64,
    /// -Re(s) / |s|: the damping ratio (negative: growing).
    pub damping_ratio: f64,
}

impl NaturalFrequency {
    /// The figures of the root `s`.
    pub fn of(s: Complex64) -> NaturalFrequency {
        NaturalFrequency {
            re_rad_s: s.re,
            im_rad_s: s.im,
            frequency_hz: s.norm() / std::f64::consts::TAU,
            // A root at s = 0 (only a charge mode can sit there exactly)
            // is undamped.
            damping_ratio: if s.norm() > 0.0 {
                -s.re / s.norm()
            } else {
                0.0
            },
        }
    }

    /// The root, rad/s.
    pub fn root(&self) -> Complex64 {
        Complex64::new(self.re_rad_s, self.im_rad_s)
    }
}

/// Whether a circuit is stable, and its least-damped natural frequency.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct StabilityVerdict {
    /// Every natural frequency but the charge modes has
    /// Re(s) < -[`STABILITY_MARGIN`] |s|.
    pub stable: bool,
    /// The natural frequency with the smallest damping ratio, charge
    /// modes aside, or `None` for a circuit without other dynamics: the
    /// one that decides the verdict.
    pub least_damped: Option<NaturalFrequency>,
    /// How many finite natural frequencies the circuit has, charge modes
    /// included.
    pub count: usize,
    /// How many of them are charge modes (s = 0, see the module
    /// documentation), set aside from the verdict.
    pub charge_modes: usize,
}

/// Relative spread of the op-amps' output resistance whose corners the
/// verdict is repeated at: a data sheet's open-loop output resistance is
/// a typical figure that moves with load and temperature; nocoil brackets
/// it by a factor of two either way (a choice of the project, stated in
/// the README).
pub const OUTPUT_OHM_FACTORS: [f64; 2] = [0.5, 2.0];

/// The verdict at one corner of the op-amps' spread.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct CornerVerdict {
    /// Every op-amp's model at this corner.
    pub opamp: OpAmpModel,
    /// The verdict there.
    pub verdict: StabilityVerdict,
}

/// The op-amp models at the corners of the spread of `model`: the
/// gain-bandwidth times (1 - spread) and (1 + spread), each with the
/// output resistance times [`OUTPUT_OHM_FACTORS`] (once when it is 0);
/// a second pole moves with the gain-bandwidth, as in the Monte Carlo.
/// Empty for the nullor, which has no dynamics to spread.
pub fn corner_models(model: &OpAmpModel, gbw_spread: f64) -> Vec<OpAmpModel> {
    let Some(gbw_hz) = model.gbw_hz() else {
        return Vec::new();
    };
    let output_ohm = model.output_ohm();
    let outputs: Vec<f64> = match output_ohm > 0.0 {
        true => OUTPUT_OHM_FACTORS.iter().map(|f| f * output_ohm).collect(),
        false => vec![0.0],
    };
    let mut corners = Vec::new();
    for gbw in [gbw_hz * (1.0 - gbw_spread), gbw_hz * (1.0 + gbw_spread)] {
        for &ohm in &outputs {
            let corner = model.with_gbw(gbw).with_output_ohm(ohm);
            if corner != *model && !corners.contains(&corner) {
                corners.push(corner);
            }
        }
    }
    corners
}

/// `netlist` with every op-amp's model replaced by `model`.
pub fn with_model(netlist: &Netlist, model: OpAmpModel) -> Netlist {
    let mut changed = netlist.clone();
    for element in &mut changed.elements {
        if let Element::OpAmp { model: m, .. } = element {
            *m = model;
        }
    }
    changed
}

/// The verdicts of `netlist` at each of `corners`.
pub fn corner_verdicts(
    netlist: &Netlist,
    corners: &[OpAmpModel],
) -> Result<Vec<CornerVerdict>, ActiveError> {
    corners
        .iter()
        .map(|&opamp| {
            Ok(CornerVerdict {
                opamp,
                verdict: is_stable(&with_model(netlist, opamp))?,
            })
        })
        .collect()
}

/// The natural frequencies of `netlist` (rad/s, charge modes included),
/// each from the reduced eigenproblem at a shift near it (see the module
/// documentation, [`reduced_roots`] and [`banded_roots`]): the roots the
/// stability verdict judges, and the poles the step response expands
/// into. An impedance scaling of the whole network (to a mean resistance
/// of 1 ohm here, for the shifts' scale) leaves them unchanged.
pub fn natural_frequencies(netlist: &Netlist) -> Result<Vec<Complex64>, ActiveError> {
    netlist.validate()?;
    let scaled = impedance_scaled(netlist, 1.0 / mean_resistance(netlist));
    let system = AcSystem::new(&scaled)?;
    let (g, c) = (system.g(), system.c());
    let scale = (g.norm() / c.norm()).max(f64::MIN_POSITIVE);
    let (sigma, roots) = SHIFT_FACTORS
        .iter()
        .find_map(|&factor| Some((factor * scale, reduced_roots(&system, factor * scale)?)))
        .ok_or(CircuitError::NoConvergence {
            what: "natural frequencies at every shift",
        })?;
    Ok(banded_roots(&system, sigma, roots))
}

/// The stability verdict of `netlist` with its own op-amp models.
pub fn is_stable(netlist: &Netlist) -> Result<StabilityVerdict, ActiveError> {
    let roots = natural_frequencies(netlist)?;
    Ok(verdict_of(netlist, roots))
}

/// The natural frequencies of `netlist` ([`natural_frequencies`]) and
/// their stability verdict ([`is_stable`]) from one eigenproblem: a Monte
/// Carlo board needs both, the verdict and where its resonances lie.
pub fn roots_and_verdict(
    netlist: &Netlist,
) -> Result<(Vec<Complex64>, StabilityVerdict), ActiveError> {
    let roots = natural_frequencies(netlist)?;
    let verdict = verdict_of(netlist, roots.clone());
    Ok((roots, verdict))
}

/// The verdict of `netlist`'s natural frequencies `roots`.
fn verdict_of(netlist: &Netlist, mut roots: Vec<Complex64>) -> StabilityVerdict {
    let count = roots.len();
    let charge_modes = charge_modes(netlist).min(count);
    roots.sort_by(|a, b| a.norm().total_cmp(&b.norm()));
    let deciding = roots.split_off(charge_modes);
    let least_damped = deciding
        .iter()
        .map(|&s| NaturalFrequency::of(s))
        .min_by(|a, b| {
            // Growing real roots all have ratio -1: the fastest decides.
            (a.damping_ratio.total_cmp(&b.damping_ratio)).then(b.re_rad_s.total_cmp(&a.re_rad_s))
        });
    StabilityVerdict {
        stable: deciding.iter().all(|s| s.re < -STABILITY_MARGIN * s.norm()),
        least_damped,
        count,
        charge_modes,
    }
}

/// Roots farther than this from the shift, as a multiple of it, are
/// taken from further shifts: a root s comes from mu = 1/(sigma - s) with
/// an absolute error of about eps |N|, so its relative error grows as
/// eps |s| / sigma. With near-ideal op-amps (GBW 10 THz, roots ten
/// decades above the filter's) one shift reported a growing real root at
/// 4.1e12 rad/s where det(G + sC) keeps one sign along the positive real
/// axis from 1e6 to 1e16 rad/s, so no real root is there (measured on a
/// 5th-order elliptic bandpass); the shift at 1.1e13 rad/s put every root
/// of that decade in the left half plane.
const BAND: f64 = 1e4;

/// How far past the first shift's largest root the bands reach. A root a
/// band's shift reports above the band is not taken: the infinite roots of
/// the MNA equations (op-amp and source rows) come out of a shift as tiny
/// eigenvalues blurred by rounding, and one at 2.3e9 rad/s reported a
/// "root" at 7.8e19 rad/s on a 5th-order elliptic highpass whose largest
/// root is 4.4e7.
const TOP_MARGIN: f64 = 10.0;

/// The roots of every magnitude, each from a shift within a factor
/// sqrt([`BAND`]) of it: `first` (from `sigma`) below sigma sqrt(BAND),
/// then one shift per band up to [`TOP_MARGIN`] times the largest root. A band whose shift
/// singular at all three of 1, sqrt 2 and e times its value keeps
/// `first`'s roots (the only estimate there is).
fn banded_roots(system: &AcSystem, sigma: f64, first: Vec<Complex64>) -> Vec<Complex64> {
    // The first shift's estimate of the largest root may be off by a
    // factor when it lies far above the shift; the bands reach past it.
    let top = TOP_MARGIN * first.iter().map(|s| s.norm()).fold(0.0, f64::max);
    let half = BAND.sqrt();
    let mut roots: Vec<Complex64> = Vec::with_capacity(first.len());
    let (mut low, mut shift) = (0.0, sigma);
    while low <= top {
        let high = shift * half;
        let in_band = |s: &&Complex64| (low..high).contains(&s.norm());
        // A band where the first shift found no root gets no shift of its
        // own: a root a shift misplaces is off by a small factor, not by
        // the decades between bands (the 4.1e12 rad/s "root" of BAND's
        // example has its true neighbours at 1.5e13 and 3.6e13), and each
        // shift costs a factorization and an eigensolve.
        let empty = !first
            .iter()
            .any(|s| (low / half..high * half).contains(&s.norm()));
        let estimates = match shift == sigma || empty {
            true => None,
            false => [1.0, std::f64::consts::SQRT_2, std::f64::consts::E]
                .iter()
                .find_map(|&f| reduced_roots(system, f * shift)),
        };
        roots.extend(estimates.as_ref().unwrap_or(&first).iter().filter(in_band));
        low = high;
        shift *= BAND;
    }
    roots
}

/// The roots of det(G + sC) from the eigenvalues of the reduced matrix
/// N = C[R, Q] (G + sigma C)^-1[Q, R], R and Q the rows and columns where
/// C has entries, shift `sigma` (rad/s); `None` if the shift is singular
/// or the eigenvalue iteration does not converge.
///
/// With K = G + sigma C, G + sC = K (I + (s - sigma) K^-1 C), and
/// K^-1 C = (K^-1 E_R)(C[R, Q] E_Q^T) has the nonzero eigenvalues of the
/// product taken the other way round, N: each eigenvalue mu != 0 gives
/// s = sigma - 1/mu (the shift-and-invert relation of
/// [`AcSystem::natural_frequencies`], on |R| unknowns instead of all).
fn reduced_roots(system: &AcSystem, sigma: f64) -> Option<Vec<Complex64>> {
    let (g, c) = (system.g(), system.c());
    let rows: Vec<usize> = (0..c.nrows())
        .filter(|&i| c.row(i).iter().any(|&x| x != 0.0))
        .collect();
    let cols: Vec<usize> = (0..c.ncols())
        .filter(|&j| c.column(j).iter().any(|&x| x != 0.0))
        .collect();
    if rows.is_empty() {
        return Some(Vec::new());
    }
    let mut picks = DMatrix::zeros(c.nrows(), rows.len());
    for (column, &row) in rows.iter().enumerate() {
        picks[(row, column)] = 1.0;
    }
    let solved = (g + c * sigma).lu().solve(&picks)?;
    let n = c.select_rows(&rows).select_columns(&cols) * solved.select_rows(&cols);
    let mu = eigenvalues(n)?;
    let largest = mu.iter().map(|z| z.norm()).fold(0.0, f64::max);
    Some(
        mu.iter()
            .filter(|z| z.norm() > ZERO_EIGENVALUE * largest)
            .map(|z| sigma - 1.0 / z)
            .collect(),
    )
}

/// The eigenvalues of `n` by faer's dense eigensolver (Hessenberg
/// reduction, then the double-shift QR iteration with exceptional shifts
/// of LAPACK's dlahqr), or `None` where the iteration did not finish.
///
/// It replaced nalgebra's real Schur form, whose QR iteration stalled at
/// every shift on builds with near-ideal op-amps (GBW 10 THz, A0 200 dB;
/// 7th- to 9th-order elliptic bandpasses and bandstops), even after
/// balancing; faer converged on all of them (the band-filter grid of
/// tests/damping.rs). faer's default multishift path is not used: the
/// reordering loop of its aggressive early deflation has no bound and
/// spun forever on the passive ideal of a 12th-order Chebyshev bandpass
/// at 0.1 Hz (tests/step.rs, `a_slow_band_filter_finishes`) when a
/// block swap kept failing. dlahqr's iteration is bounded (30 sweeps per
/// unknown, at least 300), and a blocking threshold above any size sends
/// every matrix to it.
fn eigenvalues(n: DMatrix<f64>) -> Option<Vec<Complex64>> {
    use faer::dyn_stack::{MemBuffer, MemStack};
    use faer::linalg::evd::{self, ComputeEigenvectors, EvdParams};
    let size = n.nrows();
    let m = faer::Mat::<f64>::from_fn(size, size, |i, j| n[(i, j)]);
    let mut params: faer::Spec<EvdParams, f64> = Default::default();
    params.schur.blocking_threshold = usize::MAX;
    let (mut re, mut im) = (
        faer::diag::Diag::<f64>::zeros(size),
        faer::diag::Diag::<f64>::zeros(size),
    );
    let no = ComputeEigenvectors::No;
    let scratch = evd::evd_scratch::<f64>(size, no, no, faer::Par::Seq, params);
    let mut buffer = MemBuffer::new(scratch);
    let stack = MemStack::new(&mut buffer);
    let solved = evd::evd_real(
        m.as_ref(),
        re.as_mut(),
        im.as_mut(),
        None,
        None,
        faer::Par::Seq,
        stack,
        params,
    );
    solved.ok()?;
    let values: Vec<Complex64> = (0..size).map(|i| Complex64::new(re[i], im[i])).collect();
    traces_agree(&n, &values).then_some(values)
}

/// Whether the sums of the eigenvalues and of their squares equal the
/// traces of `n` and of its square, to [`TRACE_AGREEMENT`] of their
/// scales. faer returns `Ok` even where the QR iteration ran out of
/// sweeps, leaving the unconverged eigenvalues at zero: the traces are
/// what tells.
fn traces_agree(n: &DMatrix<f64>, values: &[Complex64]) -> bool {
    let scale = n.norm();
    let sum: Complex64 = values.iter().sum();
    let squares: Complex64 = values.iter().map(|z| z * z).sum();
    // tr(N^2) = sum over i, j of N_ij N_ji: n^2 products, where forming
    // N^2 would cost n^3 on every shift of every stability verdict.
    let trace_of_square: f64 = n.component_mul(&n.transpose()).sum();
    (sum - n.trace()).norm() <= TRACE_AGREEMENT * scale
        && (squares - trace_of_square).norm() <= TRACE_AGREEMENT * scale * scale
}

/// How closely the eigenvalues' sums must match the traces, relative to
/// |N| (and |N|^2): a converged Schur form keeps them to a few hundred
/// rounding errors of |N| for the sizes here (a few hundred unknowns); a
/// missing eigenvalue moves them by its own size, so one above 1e-9 |N|
/// is caught (smaller ones are roots more than 1e9 times the shift away,
/// which the bands of [`banded_roots`] take from shifts of their own).
const TRACE_AGREEMENT: f64 = 1e-9;

/// Nodes merged into groups; each group is named by its lowest node, so
/// ground (node 0) always names its own.
pub(crate) struct Groups(Vec<usize>);

impl Groups {
    pub(crate) fn new(nodes: usize) -> Groups {
        Groups((0..nodes).collect())
    }

    pub(crate) fn root(&self, mut n: usize) -> usize {
        while self.0[n] != n {
            n = self.0[n];
        }
        n
    }

    /// Joins the groups of `a` and `b`; false when they were one already
    /// (the edge closes a loop).
    pub(crate) fn join(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.root(a), self.root(b));
        self.0[ra.max(rb)] = ra.min(rb);
        ra != rb
    }
}

/// The charge modes: groups of nodes joined by resistors, inductors and
/// sources with no such path (nor an op-amp output) to ground, touched by
/// a capacitor and by no op-amp input.
fn charge_modes(netlist: &Netlist) -> usize {
    let mut groups = Groups::new(netlist.nodes.len());
    for element in &netlist.elements {
        let joined = match *element {
            Element::Resistor { a, b, .. } | Element::Inductor { a, b, .. } => Some((a, b)),
            Element::VoltageSource { pos, neg, .. } => Some((pos, neg)),
            Element::OpAmp { out, .. } => Some((out, 0)),
            Element::Capacitor { .. } => None,
        };
        if let Some((a, b)) = joined {
            groups.join(a, b);
        }
    }
    let mut capacitive = vec![false; netlist.nodes.len()];
    let mut watched = vec![false; netlist.nodes.len()];
    for element in &netlist.elements {
        for (node, role) in element.terminals() {
            let group = groups.root(node);
            match (element, role) {
                (Element::Capacitor { .. }, _) => capacitive[group] = true,
                (_, Terminal::Input) => watched[group] = true,
                _ => {}
            }
        }
    }
    (1..netlist.nodes.len())
        .filter(|&n| groups.root(n) == n && capacitive[n] && !watched[n])
        .count()
}

/// The geometric mean of the resistances, ohm (1 without any).
fn mean_resistance(netlist: &Netlist) -> f64 {
    let logs: Vec<f64> = netlist
        .elements
        .iter()
        .filter_map(|e| match e {
            Element::Resistor { ohm, .. } => Some(ohm.ln()),
            _ => None,
        })
        .collect();
    match logs.len() {
        0 => 1.0,
        n => (logs.iter().sum::<f64>() / n as f64).exp(),
    }
}

/// Every impedance times `beta` (R, L and op-amp output resistances up,
/// capacitances down), which leaves every natural frequency unchanged.
fn impedance_scaled(netlist: &Netlist, beta: f64) -> Netlist {
    let mut scaled = netlist.clone();
    for element in &mut scaled.elements {
        match element {
            Element::Resistor { ohm: v, .. } | Element::Inductor { henry: v, .. } => *v *= beta,
            Element::Capacitor { farad, .. } => *farad /= beta,
            Element::OpAmp {
                model:
                    OpAmpModel::SinglePole { output_ohm, .. } | OpAmpModel::TwoPole { output_ohm, .. },
                ..
            } => *output_ohm *= beta,
            Element::OpAmp { .. } | Element::VoltageSource { .. } => {}
        }
    }
    scaled
}

//! Damping the resonant loops and cutsets of band-stop ladders.
//!
//! The bandstop transformation (s -> B s / (s^2 + w0^2) maps the
//! prototype's p = infinity to s = +-j w0) turns every capacitor of the
//! lowpass prototype into a series L-C pair and every inductor into a
//! parallel L-C tank, all resonant at the centre frequency w0. Where the
//! prototype has a loop of capacitors (the elliptic ladder in
//! minimum-inductor form: shunt capacitors and the capacitor of the series
//! tank between them) the transformed ladder has a loop of pairs, all
//! with zero impedance at w0: a current can circulate in it with no node
//! voltage. Where the prototype has a cutset of inductors (the
//! minimum-capacitor form: two series inductors and the inductor of the
//! shunt arm meeting at one node) the transformed ladder has a node that
//! reaches the rest only through tanks, all open at w0: it can sit at any
//! voltage with no current. Either way the network has an undamped
//! natural frequency at j w0 that no source excites and the output does
//! not see, and the ladder's mesh (or node) equations are singular there
//! for any realization of the same arm impedances, since the loop's row
//! (or the node's) vanishes entry by entry at j w0: no choice among
//! equivalent arms removes it. In the passive ideal it stays on the axis;
//! with simulated inductors the op-amps' finite gain-bandwidth moves it,
//! and nocoil's builds of elliptic bandstops measured it in the right half
//! plane by about w0 / (4 wt) relative (damping ratio -3.0e-5 at a 1 kHz
//! centre with 10 MHz op-amps, -2.4e-4 with 1 MHz): an internal
//! oscillation at the notch.
//!
//! Remedy: every resonator of such a loop or cutset gets the same quality
//! factor Q from a resistor, w L / Q in series with a pair, Q w L across a
//! tank. Every pair's impedance (tank's admittance) is then
//! k (s^2 + w0 s / Q + w0^2) / s with its own k, so the loop's (cutset's)
//! modes move to s^2 + (w0/Q) s + w0^2 = 0, a damping ratio of 1/(2Q),
//! checked in closed form by tests/damping.rs. The transmission zeros at
//! w0 become deep finite notches, and the passband, where the resonators
//! are far from resonance, barely moves; the build's deviation from the
//! passive ideal is measured and reported as for any build.

use crate::circuit::{Element, ElementKind, Netlist};

use super::error::ActiveError;
use super::gic::{add_fresh, fresh_node};
use super::passive::{ends, Passive};
use super::stability::Groups;

/// Two resonances closer than this fraction count as one (the transform
/// gives every resonator of a loop or cutset w0 to rounding, about
/// 1e-15 relative).
const SAME_RESONANCE: f64 = 1e-9;

/// How an inductor and a capacitor resonate together.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Joint {
    /// In series through a node nothing else touches: zero impedance at
    /// resonance. Loops of such pairs are damped by a series resistor.
    Series {
        /// The node between them.
        middle: usize,
    },
    /// In parallel between the same two nodes: zero admittance at
    /// resonance. Cutsets of such tanks are damped by a parallel
    /// resistor.
    Parallel,
}

/// An inductor and a capacitor that resonate together.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Resonator {
    /// The inductor's index.
    pub inductor: usize,
    /// The capacitor's index.
    pub capacitor: usize,
    /// How they are joined.
    pub joint: Joint,
    /// The resonator's outer ends.
    pub ends: (usize, usize),
    /// Its resonance, rad/s.
    pub w_rad_s: f64,
}

/// The other end of a two-terminal element from `node`.
fn other_end(element: &Element, node: usize) -> Option<usize> {
    let (a, b) = ends(element)?;
    Some(if a == node { b } else { a })
}

/// 1/sqrt(LC) of two elements, when both have values.
fn resonance(netlist: &Netlist, inductor: usize, capacitor: usize) -> Option<f64> {
    let henry = netlist.elements[inductor].value()?;
    let farad = netlist.elements[capacitor].value()?;
    Some(1.0 / (henry * farad).sqrt())
}

/// An inductor and a capacitor of a passive netlist that resonate
/// together: in series through a node nothing else touches (nor `in` or
/// `out`), or in parallel between the same two nodes. What the parts
/// stage tunes each converter's trim by (`realize::tuning`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LcPair {
    /// The inductor's index.
    pub inductor: usize,
    /// The capacitor's index.
    pub capacitor: usize,
    /// The node between them, for a series pair (`None`: a tank).
    pub middle: Option<usize>,
    /// Its resonance, rad/s.
    pub w_rad_s: f64,
}

/// The L-C pairs of `netlist` (a passive network to the active stage's
/// contract, else none).
pub fn lc_pairs(netlist: &Netlist) -> Vec<LcPair> {
    let Ok(passive) = Passive::read(netlist) else {
        return Vec::new();
    };
    resonators(&passive)
        .into_iter()
        .map(|r| LcPair {
            inductor: r.inductor,
            capacitor: r.capacitor,
            middle: match r.joint {
                Joint::Series { middle } => Some(middle),
                Joint::Parallel => None,
            },
            w_rad_s: r.w_rad_s,
        })
        .collect()
}

/// Every series L-C pair and every parallel L-C tank of the netlist.
fn resonators(passive: &Passive) -> Vec<Resonator> {
    let netlist = &passive.netlist;
    let kind = |i: usize| netlist.elements[i].kind();
    let mut found = Vec::new();
    for (m, inductor, capacitor) in passive.series_pairs() {
        let (Some(a), Some(b), Some(w_rad_s)) = (
            other_end(&netlist.elements[inductor], m),
            other_end(&netlist.elements[capacitor], m),
            resonance(netlist, inductor, capacitor),
        ) else {
            continue;
        };
        found.push(Resonator {
            inductor,
            capacitor,
            joint: Joint::Series { middle: m },
            ends: (a, b),
            w_rad_s,
        });
    }
    let mut taken = vec![false; netlist.elements.len()];
    for inductor in (0..netlist.elements.len()).filter(|&i| kind(i) == ElementKind::Inductor) {
        let Some((a, b)) = ends(&netlist.elements[inductor]) else {
            continue;
        };
        let partner = (0..netlist.elements.len()).find(|&c| {
            !taken[c]
                && kind(c) == ElementKind::Capacitor
                && matches!(ends(&netlist.elements[c]), Some(e) if e == (a, b) || e == (b, a))
        });
        let Some(capacitor) = partner else { continue };
        let Some(w_rad_s) = resonance(netlist, inductor, capacitor) else {
            continue;
        };
        taken[capacitor] = true;
        found.push(Resonator {
            inductor,
            capacitor,
            joint: Joint::Parallel,
            ends: (a, b),
            w_rad_s,
        });
    }
    found
}

/// The series pairs of `group` (one resonance) that lie on a loop made
/// of such pairs alone.
fn on_loops(nodes: usize, group: &[Resonator]) -> Vec<Resonator> {
    let pairs: Vec<&Resonator> = group
        .iter()
        .filter(|r| matches!(r.joint, Joint::Series { .. }))
        .collect();
    let mut joined = Groups::new(nodes);
    let closing: Vec<usize> = pairs
        .iter()
        .filter(|r| !joined.join(r.ends.0, r.ends.1))
        .map(|r| r.ends.0)
        .collect();
    let looped: Vec<usize> = closing.iter().map(|&n| joined.root(n)).collect();
    pairs
        .into_iter()
        .filter(|r| looped.contains(&joined.root(r.ends.0)))
        .copied()
        .collect()
}

/// The tanks of `group` (one resonance) that bound a group of nodes
/// every other element keeps together but which reaches ground only
/// through such tanks: a cutset of tanks, all open at resonance, so the
/// group can sit at any voltage with no current.
fn on_cutsets(passive: &Passive, group: &[Resonator]) -> Vec<Resonator> {
    let netlist = &passive.netlist;
    let tanks: Vec<&Resonator> = group
        .iter()
        .filter(|r| r.joint == Joint::Parallel)
        .collect();
    let in_tank = |i: usize| tanks.iter().any(|t| t.inductor == i || t.capacitor == i);
    let mut joined = Groups::new(netlist.nodes.len());
    for (index, element) in netlist.elements.iter().enumerate() {
        match (*element).clone() {
            Element::VoltageSource { pos, neg, .. } => {
                joined.join(pos, neg);
            }
            e if !in_tank(index) => {
                if let Some((a, b)) = ends(&e) {
                    joined.join(a, b);
                }
            }
            _ => {}
        }
    }
    let ground = joined.root(0);
    tanks
        .into_iter()
        .filter(|t| joined.root(t.ends.0) != ground || joined.root(t.ends.1) != ground)
        .copied()
        .collect()
}

/// The resonators that lie on a loop of series pairs or a cutset of
/// tanks sharing one resonance, in netlist order: the ones [`damp`] must
/// load. Empty for every ladder but those with such loops or cutsets
/// (elliptic bandstops).
pub(crate) fn resonant_loops(passive: &Passive) -> Vec<Resonator> {
    let mut all = resonators(passive);
    all.sort_by(|p, q| p.w_rad_s.total_cmp(&q.w_rad_s));
    let mut chosen: Vec<Resonator> = Vec::new();
    let mut start = 0;
    while start < all.len() {
        let w = all[start].w_rad_s;
        let end = start
            + all[start..]
                .iter()
                .take_while(|p| p.w_rad_s - w <= SAME_RESONANCE * w)
                .count();
        let group = &all[start..end];
        chosen.extend(on_loops(passive.netlist.nodes.len(), group));
        chosen.extend(on_cutsets(passive, group));
        start = end;
    }
    chosen.sort_by_key(|p| p.inductor);
    chosen
}

/// A damping resistor added to a pair.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct DampingResistor {
    /// Its designator.
    pub designator: String,
    /// The inductor of the pair it damps.
    pub inductor: String,
    /// Its value, ohm.
    pub ohm: f64,
}

/// `passive` with every resonator loaded to quality factor `q`: a
/// resistor w L / q in series with a pair (between the inductor and the
/// capacitor, so a grounded inductor stays grounded), a resistor q w L
/// across a tank.
pub(crate) fn damp(
    passive: &Passive,
    resonators: &[Resonator],
    q: f64,
) -> Result<(Passive, Vec<DampingResistor>), ActiveError> {
    let mut netlist: Netlist = passive.netlist.clone();
    let mut added = Vec::new();
    for r in resonators {
        let inductor = netlist.elements[r.inductor].name().to_string();
        let henry = netlist.elements[r.inductor].value().unwrap_or(f64::NAN);
        let (a, b, ohm) = match r.joint {
            Joint::Series { middle } => {
                let node = fresh_node(&mut netlist, &format!("d_{inductor}"))?;
                if let Element::Capacitor { a, b, .. } = &mut netlist.elements[r.capacitor] {
                    for end in [a, b] {
                        if *end == middle {
                            *end = node;
                        }
                    }
                }
                (middle, node, r.w_rad_s * henry / q)
            }
            Joint::Parallel => (r.ends.0, r.ends.1, q * r.w_rad_s * henry),
        };
        let designator = add_fresh(
            &mut netlist,
            Element::Resistor {
                name: format!("RD_{inductor}"),
                a,
                b,
                ohm,
            },
        )?;
        added.push(DampingResistor {
            designator,
            inductor,
            ohm,
        });
    }
    Ok((
        Passive {
            netlist,
            ..passive.clone()
        },
        added,
    ))
}

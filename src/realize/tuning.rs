//! What each trim is set for: the resonance its converter makes with a
//! part of the board, not the element value, where there is one.
//!
//! The lowpass-to-bandpass and bandstop transformations turn every ladder
//! element into a resonator at the band's centre, and a lowpass or
//! highpass with transmission zeros has one L-C pair per zero. On a board
//! the capacitor of such a pair sits on a preferred value with its own
//! tolerance, so restoring the simulated inductor's nominal value leaves
//! the pair off its frequency by half the capacitor's error; setting the
//! inductor so the pair resonates where the passive ideal's pair does
//! removes it. This is the resonator tuning of coupled-resonator filters
//! (Dishal, "Alignment and adjustment of synchronously tuned multiple
//! resonant circuit filters", Proc. IRE 1951), applied to a ladder's
//! pairs; the FDNR image of an L-C pair is an R-D pair with the same
//! product rule (Bruton, "Network transfer functions using the concept of
//! frequency-dependent negative resistance", IEEE Trans. Circuit Theory
//! 1969).
//!
//! A pair resonates at w^2 = 1/(L C) (or 1/(R D) in the FDNR image), so a
//! converter realizing q with a partner of value p is on its frequency
//! when q p equals the passive ideal's product: the target of its trim is
//! q_nominal p_nominal / p_board, a product of element values with
//! exponents +-1 like the chain's own (see [`crate::active::chain`]).

use crate::active::chain::{value, Chain};
use crate::active::{DampingResistor, Handles, Stage};
use crate::analysis::{Product, Trimmer, Tuning};
use crate::circuit::{CircuitError, Element, ElementKind, Netlist};

/// A resonator of the passive ideal: an inductor and a capacitor that
/// resonate together, in series through a node no other element touches,
/// or in parallel between the same two nodes.
#[derive(Debug, Clone, PartialEq)]
pub struct Resonator {
    /// The inductor's name.
    pub inductor: String,
    /// The capacitor's name.
    pub capacitor: String,
    /// 1 / (2 pi sqrt(L C)), Hz.
    pub frequency_hz: f64,
    /// In parallel (a tank) rather than in series.
    pub tank: bool,
    /// The node between the two of a series pair (passive node name).
    pub internal: Option<String>,
}

/// The resonators of a passive ideal (its L-C pairs, see
/// [`crate::active::lc_pairs`]), by name and frequency.
pub fn resonators(passive: &Netlist) -> Vec<Resonator> {
    let name = |i: usize| passive.elements[i].name().to_string();
    crate::active::lc_pairs(passive)
        .into_iter()
        .map(|p| Resonator {
            inductor: name(p.inductor),
            capacitor: name(p.capacitor),
            frequency_hz: p.w_rad_s / std::f64::consts::TAU,
            tank: p.middle.is_none(),
            internal: p.middle.map(|m| passive.nodes[m].clone()),
        })
        .collect()
}

/// What one trim is set for.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "set_for", rename_all = "snake_case")]
pub enum TrimGoal {
    /// Its converter resonating with `partner` at `frequency_hz`, the
    /// frequency of the passive ideal's pair: on the bench, a reading of
    /// the resonance (see the tuning procedure); the trim's value with
    /// nominal parts restores the pair's product with the partner's
    /// preferred value.
    Resonance {
        /// The partner's designator.
        partner: String,
        /// The partner's index in the build's netlist.
        #[serde(skip)]
        partner_index: usize,
        /// The resonance, Hz.
        frequency_hz: f64,
    },
    /// Its chain's computed value, set with an ohmmeter before the
    /// trimmer is fitted: a converter with no resonator, or the chain of
    /// a floating inductor that the resonance reading does not see (its
    /// value with nominal parts matches the chain that is read).
    Preset,
}

/// The build's element that resonates with the converter replacing
/// `replaces`, when `r` is that converter's resonator: a GIC's partner is
/// the ladder capacitor itself, an FDNR's (the image of the capacitor)
/// the resistor that images the inductor.
fn partner_of(r: &Resonator, replaces: &str, build: &Netlist, stages: &[Stage]) -> Option<usize> {
    if r.inductor == replaces {
        build.element_index(&r.capacitor)
    } else if r.capacitor == replaces {
        stages.iter().find_map(|s| match s.handles {
            Handles::Element(i) if s.replaces.as_deref() == Some(r.inductor.as_str()) => Some(i),
            _ => None,
        })
    } else {
        None
    }
}

/// The end of element `name` of `passive` with the fewer elements between
/// it and `out` (ground not passed through).
fn nearer_out(passive: &Netlist, name: &str) -> Option<String> {
    let i = passive.element_index(name)?;
    let out = passive.node_index("out")?;
    let distance = distances_from(passive, out);
    passive.elements[i]
        .terminals()
        .iter()
        .map(|t| t.0)
        .min_by_key(|&n| distance[n])
        .map(|n| passive.nodes[n].clone())
}

/// Breadth-first distance in elements from node `from` to every node,
/// not passing through ground (usize::MAX where unreached).
fn distances_from(netlist: &Netlist, from: usize) -> Vec<usize> {
    let mut distance = vec![usize::MAX; netlist.nodes.len()];
    distance[from] = 0;
    let mut queue = std::collections::VecDeque::from([from]);
    while let Some(node) = queue.pop_front() {
        if node == 0 {
            continue;
        }
        for e in &netlist.elements {
            let t = e.terminals();
            if !t.iter().any(|x| x.0 == node) {
                continue;
            }
            for (next, _) in t {
                if distance[next] == usize::MAX {
                    distance[next] = distance[node] + 1;
                    queue.push_back(next);
                }
            }
        }
    }
    distance
}

/// The smallest step a trimmer is set in, as a fraction of its value: a
/// multi-turn cermet trimmer (common practice: 15 to 25 turns) is set to
/// about a thousandth of its range.
pub const TRIMMER_RESOLUTION: f64 = 1e-3;

impl super::SnappedBuild {
    /// How the Monte Carlo sets this build's trimmers on every board:
    /// `tuned` by the procedure's readings (each resonance trim restores
    /// its pair's product with that board's parts; preset trims stay) or
    /// all left at their nominal settings.
    pub fn tuning(&self, tuned: bool) -> Tuning {
        let chains = self.stages.iter().flat_map(|s| match &s.handles {
            Handles::Converter(chains) => chains.as_slice(),
            _ => &[],
        });
        let trimmers = self
            .trims
            .iter()
            .zip(chains)
            .map(|(t, chain)| Trimmer {
                element: t.index,
                fixed_ohm: t.fixed_ohm,
                trimmer_ohm: t.pot_ohm,
                setting_ohm: t.setting_ohm,
                reading: match t.goal {
                    TrimGoal::Resonance { partner_index, .. } => {
                        let mut factors: Vec<(usize, i32)> =
                            chain.z.into_iter().zip(chain.exponents).collect();
                        factors.push((partner_index, 1));
                        let target = factors
                            .iter()
                            .map(|&(i, e)| value(&self.netlist, i).powi(e))
                            .product();
                        Some(Product { factors, target })
                    }
                    TrimGoal::Preset => None,
                },
            })
            .collect();
        Tuning {
            trimmers,
            tuned,
            resolution: TRIMMER_RESOLUTION,
        }
    }

    /// Whether any trim is set by a reading on the bench (else the
    /// tuning leaves every board as it is).
    pub fn has_readings(&self) -> bool {
        self.trims
            .iter()
            .any(|t| matches!(t.goal, TrimGoal::Resonance { .. }))
    }
}

/// A ladder arm of the passive ideal: the elements between two of its
/// junction nodes (the nodes of the terminations, ground, and every node
/// that more or fewer than two ladder elements touch).
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Arm {
    /// Its elements, by the passive ideal's names: on the board, a
    /// converter stands for its inductor (or, in the FDNR image, its
    /// capacitor).
    pub parts: Vec<String>,
    /// Its two ends, by node name ("0" is ground).
    pub ends: [String; 2],
    /// The nodes inside it, between its elements (a series pair's
    /// middle), by name.
    pub inner: Vec<String>,
    /// The parts to lift to take it out of circuit: its capacitors and
    /// damping resistors, and each converter's input resistor (Z1, with
    /// the converter's op-amp inputs at the same nodes, so none is left
    /// floating); the passive ideal's own for [`arms`].
    pub lift: Vec<String>,
    /// Every element of the board that belongs to it (a converter's
    /// parts and op-amps, a damping resistor), by designator: what taking
    /// it out of circuit disconnects; the passive ideal's own for
    /// [`arms`].
    #[serde(skip)]
    pub elements: Vec<String>,
}

/// The arms of a passive ideal's ladder (its inductors and capacitors;
/// its only resistors are the terminations), or `None` when an arm does
/// not have exactly two ends.
pub fn arms(passive: &Netlist) -> Option<Vec<Arm>> {
    let ladder: Vec<usize> = (0..passive.elements.len())
        .filter(|&i| {
            matches!(
                passive.elements[i].kind(),
                ElementKind::Inductor | ElementKind::Capacitor
            )
        })
        .collect();
    let nodes_of = |i: usize| -> Vec<usize> {
        passive.elements[i]
            .terminals()
            .iter()
            .map(|t| t.0)
            .collect()
    };
    let mut touches = vec![0_usize; passive.nodes.len()];
    let mut fixed = vec![false; passive.nodes.len()];
    fixed[0] = true;
    for i in 0..passive.elements.len() {
        for n in nodes_of(i) {
            if ladder.contains(&i) {
                touches[n] += 1;
            } else {
                fixed[n] = true;
            }
        }
    }
    let internal = |n: usize| !fixed[n] && touches[n] == 2;
    // Union-find over the ladder elements: joined through an internal
    // node (in series), then by equal ends (in parallel).
    let mut group: Vec<usize> = (0..ladder.len()).collect();
    fn root(group: &mut [usize], mut k: usize) -> usize {
        while group[k] != k {
            group[k] = group[group[k]];
            k = group[k];
        }
        k
    }
    for x in 0..ladder.len() {
        for y in x + 1..ladder.len() {
            let shared = nodes_of(ladder[x])
                .into_iter()
                .any(|n| internal(n) && nodes_of(ladder[y]).contains(&n));
            if shared {
                let (rx, ry) = (root(&mut group, x), root(&mut group, y));
                group[rx] = ry;
            }
        }
    }
    let ends_of = |members: &[usize]| -> Vec<usize> {
        let mut ends: Vec<usize> = members
            .iter()
            .flat_map(|&k| nodes_of(ladder[k]))
            .filter(|&n| !internal(n))
            .collect();
        ends.sort_unstable();
        ends.dedup();
        ends
    };
    let roots: Vec<usize> = (0..ladder.len()).map(|k| root(&mut group, k)).collect();
    let mut merged: Vec<(Vec<usize>, Vec<usize>)> = Vec::new();
    for r in (0..ladder.len()).filter(|&k| roots[k] == k) {
        let g: Vec<usize> = (0..ladder.len()).filter(|&k| roots[k] == r).collect();
        let ends = ends_of(&g);
        match merged.iter_mut().find(|(_, e)| *e == ends) {
            Some((members, _)) => members.extend(g),
            None => merged.push((g, ends)),
        }
    }
    merged
        .into_iter()
        .map(|(members, ends)| match ends.as_slice() {
            &[a, b] => {
                let mut m = members.clone();
                m.sort_unstable();
                let parts: Vec<String> = m
                    .iter()
                    .map(|&k| passive.elements[ladder[k]].name().to_string())
                    .collect();
                let mut inner: Vec<String> = m
                    .iter()
                    .flat_map(|&k| nodes_of(ladder[k]))
                    .filter(|&n| internal(n))
                    .map(|n| passive.nodes[n].clone())
                    .collect();
                inner.sort();
                inner.dedup();
                Some(Arm {
                    lift: parts.clone(),
                    elements: parts.clone(),
                    parts,
                    ends: [passive.nodes[a].clone(), passive.nodes[b].clone()],
                    inner,
                })
            }
            _ => None,
        })
        .collect()
}

/// What a tuning step reads, against the generator at `in`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Reading {
    /// The deepest minimum of the level: a series pair or a tank in the
    /// signal's path shorts or blocks it at its resonance.
    DeepestMinimum,
    /// No phase shift against the generator: the one reactive arm left
    /// in circuit is resistive at its resonance.
    InPhase,
}

impl std::fmt::Display for Reading {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Reading::DeepestMinimum => "the deepest minimum",
            Reading::InPhase => "zero phase against in",
        })
    }
}

/// One step of the tuning procedure: one trimmer set for one resonance.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct TuningStep {
    /// The trimmer's designator.
    pub trimmer: String,
    /// The passive element its converter replaces.
    pub converter_for: String,
    /// The part its converter resonates with.
    pub partner: String,
    /// The generator's frequency, Hz: where the nominal board, set up
    /// for the step, shows the reading with the build's op-amp model
    /// (what the bench sees).
    pub frequency_hz: f64,
    /// Where it shows it with ideal op-amps, Hz: the pair's resonance on
    /// the nominal board, 1 / (2 pi sqrt(L C)) (or sqrt(R D)).
    pub ideal_frequency_hz: f64,
    /// Whether the reading was found with the build's op-amp model; if
    /// not, `frequency_hz` is the ideal frequency.
    pub found_with_model: bool,
    /// The generator's level at `in`, volt peak (see
    /// [`generator_level_v`]; set by the design, which knows the swing).
    pub generator_v_peak: f64,
    /// The arms shorted for the step: clip leads join all their nodes.
    pub shorted: Vec<Arm>,
    /// The arms taken out of circuit for the step.
    pub out_of_circuit: Vec<Arm>,
    /// The largest op-amp output, set up for the step at its frequency,
    /// per volt at `in` (what bounds the generator's level).
    pub opamp_gain: f64,
    /// What to set the trimmer for.
    pub reading: Reading,
    /// Where to measure.
    pub node: String,
}

/// How a resonator is put between the terminations for its step.
#[derive(Debug, Clone, PartialEq)]
struct Placement {
    shorted: Vec<usize>,
    /// In series between the source's and the load's nodes (else from
    /// the merged node to ground).
    series: bool,
    /// The end that carries the pair's current on (series: the load
    /// side; to ground: the end that is not grounded).
    live_end: usize,
}

/// The procedure's steps and each converter's goals, chain by chain, for
/// `converters` (stage index, replaced element, chains) of `build` (the
/// active build of `passive`, with `stages`). A resonator's converter
/// gets a step when its resonance can be read: in place, as the deepest
/// minimum at `out`, when the pair alone makes a transmission zero of
/// the passive ideal there; otherwise (a simulated-inductor build only)
/// with the other arms shorted or taken out of circuit so that the pair
/// alone sits between the terminations. The chain its reading sees is
/// set for the resonance; every other chain is preset.
pub(super) fn procedure(
    passive: &Netlist,
    build: &Netlist,
    stages: &[Stage],
    damping: &[DampingResistor],
    converters: &[(usize, &[Chain])],
) -> Procedure {
    let resonators = resonators(passive);
    let arms: Vec<Arm> = arms(passive)
        .unwrap_or_default()
        .into_iter()
        .map(|arm| {
            let (elements, lift): (Vec<Vec<String>>, Vec<Vec<String>>) = arm
                .parts
                .iter()
                .map(|part| on_board(part, build, stages, damping))
                .unzip();
            Arm {
                elements: elements.concat(),
                lift: lift.concat(),
                ..arm
            }
        })
        .collect();
    let fdnr = stages
        .iter()
        .any(|s| s.kind == crate::active::StageKind::Fdnr);
    let mut steps = Vec::new();
    let mut goals = Vec::new();
    let mut read_by = Vec::new();
    for &(stage, chains) in converters {
        let preset = vec![TrimGoal::Preset; chains.len()];
        let replaces = stages[stage].replaces.as_deref().unwrap_or_default();
        let found = resonators
            .iter()
            .find_map(|r| partner_of(r, replaces, build, stages).map(|p| (r, p)));
        let Some((r, partner)) = found else {
            goals.push(preset);
            continue;
        };
        let step = if in_place(passive, r, &resonators) {
            let live = match &r.internal {
                Some(node) => node.clone(),
                None => nearer_out(passive, &r.inductor).unwrap_or_default(),
            };
            Some((Vec::new(), Vec::new(), Reading::DeepestMinimum, live))
        } else if fdnr {
            None
        } else {
            isolate(passive, &arms, r).map(|(arm, p)| {
                let reading = match (p.series, r.tank) {
                    (true, true) | (false, false) => Reading::DeepestMinimum,
                    _ => Reading::InPhase,
                };
                let live = match &r.internal {
                    Some(node) => node.clone(),
                    None => passive.nodes[p.live_end].clone(),
                };
                let shorted = p.shorted.iter().map(|&k| arms[k].clone()).collect();
                let out = (0..arms.len())
                    .filter(|&k| k != arm && !p.shorted.contains(&k))
                    .map(|k| arms[k].clone())
                    .collect();
                (shorted, out, reading, live)
            })
        };
        let Some((shorted, out_of_circuit, reading, live)) = step else {
            goals.push(preset);
            continue;
        };
        let read = chain_at(chains, build, &live);
        read_by.push((chains[read], partner));
        steps.push(TuningStep {
            trimmer: super::trimmer_designator(build.elements[chains[read].trim_element()].name()),
            converter_for: replaces.to_string(),
            partner: build.elements[partner].name().to_string(),
            // Both found once the trims are solved (see `read_steps`).
            frequency_hz: r.frequency_hz,
            ideal_frequency_hz: r.frequency_hz,
            found_with_model: false,
            generator_v_peak: 1.0,
            opamp_gain: f64::NAN,
            shorted,
            out_of_circuit,
            reading,
            node: "out".to_string(),
        });
        goals.push(
            (0..chains.len())
                .map(|k| match k == read {
                    true => TrimGoal::Resonance {
                        partner: build.elements[partner].name().to_string(),
                        partner_index: partner,
                        frequency_hz: r.frequency_hz,
                    },
                    false => TrimGoal::Preset,
                })
                .collect(),
        );
    }
    Procedure {
        steps,
        goals,
        read_by,
    }
}

/// The procedure as [`procedure`] finds it.
pub(super) struct Procedure {
    /// The steps, their frequencies still the passive ideal's.
    pub steps: Vec<TuningStep>,
    /// Each converter's goals, chain by chain.
    pub goals: Vec<Vec<TrimGoal>>,
    /// Each step's read chain and its partner's element index.
    pub read_by: Vec<(Chain, usize)>,
}

/// The board's elements standing for the passive ideal's `part` (its
/// converter's parts and op-amps, or the part itself, and its damping
/// resistor) and those of them to lift so that it carries no current (a
/// converter's input resistors, Z1 of each chain, in place of the rest).
fn on_board(
    part: &str,
    build: &Netlist,
    stages: &[Stage],
    damping: &[DampingResistor],
) -> (Vec<String>, Vec<String>) {
    let (mut elements, mut lift) = match stages.iter().find(|s| s.replaces.as_deref() == Some(part))
    {
        Some(s) => (
            s.elements.iter().chain(&s.opamps).cloned().collect(),
            match &s.handles {
                Handles::Converter(chains) => chains
                    .iter()
                    .map(|c| build.elements[c.z[0]].name().to_string())
                    .collect(),
                _ => s.elements.clone(),
            },
        ),
        None => (vec![part.to_string()], vec![part.to_string()]),
    };
    for d in damping.iter().filter(|d| d.inductor == part) {
        elements.push(d.designator.clone());
        lift.push(d.designator.clone());
    }
    (elements, lift)
}

/// Relative distance under which two resonances count as one frequency.
const SAME_FREQUENCY: f64 = 1e-3;

/// The passive ideal's transfer at a transmission zero, relative to its
/// passband level: rounding leaves about 1e-12 at an exact zero; the
/// deepest stopband of any design nocoil accepts is far above this.
const ZERO_TRANSFER: f64 = 1e-8;

/// Whether `r` alone makes a transmission zero at `out` of `passive`, so
/// its step reads the deepest minimum there with nothing changed.
fn in_place(passive: &Netlist, r: &Resonator, all: &[Resonator]) -> bool {
    let alone = all.iter().all(|o| {
        o.inductor == r.inductor || (o.frequency_hz / r.frequency_hz - 1.0).abs() > SAME_FREQUENCY
    });
    let zero = crate::circuit::response(passive, &[r.frequency_hz])
        .ok()
        .and_then(|h| h.h.first().map(|v| v.norm()))
        .is_some_and(|h| h < ZERO_TRANSFER);
    alone && zero
}

/// The chain of `chains` whose input (the free end of its Z1) is node
/// `live`, or the first.
fn chain_at(chains: &[Chain], build: &Netlist, live: &str) -> usize {
    chains
        .iter()
        .position(|c| {
            build.elements[c.z[0]]
                .terminals()
                .iter()
                .any(|t| build.nodes[t.0].eq_ignore_ascii_case(live))
        })
        .unwrap_or(0)
}

/// The arm of `r` (it must hold only the pair) and how to place it alone
/// between the terminations: the placement that shorts the fewest arms,
/// in series before to ground on a tie.
fn isolate(passive: &Netlist, arms: &[Arm], r: &Resonator) -> Option<(usize, Placement)> {
    let node = |name: &str| passive.node_index(name);
    let k = arms.iter().position(|a| {
        let mut parts = a.parts.clone();
        parts.sort();
        let mut pair = vec![r.inductor.clone(), r.capacitor.clone()];
        pair.sort();
        parts == pair
    })?;
    let source = passive.elements.iter().find_map(|e| match *e {
        Element::Resistor { a, b, .. } if passive.nodes[a] == "in" => Some(b),
        Element::Resistor { a, b, .. } if passive.nodes[b] == "in" => Some(a),
        _ => None,
    })?;
    let load = node("out")?;
    let edges: Vec<(usize, usize)> = arms
        .iter()
        .map(|a| Some((node(&a.ends[0])?, node(&a.ends[1])?)))
        .collect::<Option<_>>()?;
    let (a, b) = edges[k];
    let path = |from: usize, to: usize, forbid: &[usize]| path(&edges, k, from, to, forbid);
    let nodes_on = |arms_on: &[usize]| -> Vec<usize> {
        arms_on
            .iter()
            .flat_map(|&j| [edges[j].0, edges[j].1])
            .collect()
    };
    let mut options = Vec::new();
    for (x, y) in [(a, b), (b, a)] {
        // In series: source ... x | pair | y ... load.
        if x != 0 && y != 0 {
            if let Some(p1) = path(source, x, &[0, y]) {
                let mut forbid = nodes_on(&p1);
                forbid.extend([0, x, source]);
                if let Some(p2) = path(y, load, &forbid) {
                    options.push(Placement {
                        shorted: [p1, p2].concat(),
                        series: true,
                        live_end: y,
                    });
                }
            }
        }
        // To ground: source, load and x merged | pair | y ... ground.
        if x != 0 {
            let p1 = path(x, source, &[0, y]);
            let p2 = path(x, load, &[0, y]);
            if let (Some(p1), Some(p2)) = (p1, p2) {
                let mut forbid = nodes_on(&p1);
                forbid.extend(nodes_on(&p2));
                forbid.push(x);
                let p3 = if y == 0 {
                    Some(Vec::new())
                } else {
                    path(y, 0, &forbid)
                };
                if let Some(p3) = p3 {
                    let mut shorted = [p1, p2, p3].concat();
                    shorted.sort_unstable();
                    shorted.dedup();
                    options.push(Placement {
                        shorted,
                        series: false,
                        live_end: x,
                    });
                }
            }
        }
    }
    options
        .into_iter()
        .min_by_key(|p| (p.shorted.len(), !p.series))
        .map(|p| (k, p))
}

/// The arms (by index) of a shortest path from node `from` to node `to`
/// over `edges` (arm ends) without arm `skip` and without passing
/// through `forbid` (which may hold `to` only as the end itself: a node
/// in `forbid` is never entered unless it is `to`).
fn path(
    edges: &[(usize, usize)],
    skip: usize,
    from: usize,
    to: usize,
    forbid: &[usize],
) -> Option<Vec<usize>> {
    if from == to {
        return Some(Vec::new());
    }
    let mut came: std::collections::HashMap<usize, (usize, usize)> = Default::default();
    let mut queue = std::collections::VecDeque::from([from]);
    while let Some(n) = queue.pop_front() {
        for (j, &(u, v)) in edges.iter().enumerate() {
            let next = match (j != skip, u == n, v == n) {
                (true, true, _) => v,
                (true, _, true) => u,
                _ => continue,
            };
            if next == from || came.contains_key(&next) || (forbid.contains(&next) && next != to) {
                continue;
            }
            came.insert(next, (n, j));
            if next == to {
                let mut arms = Vec::new();
                let mut at = to;
                while at != from {
                    let (prev, arm) = came[&at];
                    arms.push(arm);
                    at = prev;
                }
                return Some(arms);
            }
            queue.push_back(next);
        }
    }
    None
}

/// The resistance of the clip lead that shorts an arm for a step, ohm: a
/// short clip lead has tens of milliohms (common practice).
pub const CLIP_OHM: f64 = 0.01;

impl TuningStep {
    /// `board` (an active on parts network, as the design holds it or as
    /// soldered) set up for this step: the nodes of each arm of
    /// `shorted` joined by clip leads of [`CLIP_OHM`], each arm of
    /// `out_of_circuit` disconnected whole (its converters' parts,
    /// op-amps and trimmers too): what lifting its `lift` parts and its
    /// converters' op-amp inputs leaves of the board.
    pub fn configure(&self, board: &Netlist) -> Result<Netlist, CircuitError> {
        let removed: Vec<String> = self
            .out_of_circuit
            .iter()
            .flat_map(|a| &a.elements)
            .flat_map(|e| [e.clone(), super::trimmer_designator(e)])
            .collect();
        let gone = |name: &str| removed.iter().any(|r| r.eq_ignore_ascii_case(name));
        let mut out = board.retaining(|i| !gone(board.elements[i].name()))?;
        let mut clips = 0;
        for arm in &self.shorted {
            // Every node of the arm joined, not only its ends: a series
            // pair shorted end to end is a loop resonant at the step's
            // frequency, and a floating converter's chains, matched only
            // to their tolerances, leak its current to ground.
            let nodes: Vec<&String> = arm.ends.iter().chain(&arm.inner).collect();
            for pair in nodes.windows(2) {
                clips += 1;
                let (a, b) = (out.node(pair[0]), out.node(pair[1]));
                out.add(Element::Resistor {
                    name: format!("RCLIP{clips}"),
                    a,
                    b,
                    ohm: CLIP_OHM,
                })?;
            }
        }
        Ok(out)
    }
}

/// Points of the scan for a step's reading per ratio of 1.1/0.9 of its
/// span: a point every 0.05 %.
const SCAN_POINTS: usize = 401;

/// How far the scan reaches beyond the pair's resonance in the passive
/// ideal and its resonance with ideal op-amps on the nominal board,
/// relative. Converters compensated for slow op-amps realize values
/// far from the ladder's with ideal op-amps (a 40 kHz bandpass on 2 MHz
/// op-amps: 45.6 kHz) and near it with their own; a reading beyond 10 %
/// of both is not the pair's.
const SCAN_SPAN: f64 = 0.1;

/// Bisection or golden-section steps after the scan: each narrows the
/// bracket (0.1 % wide) by at least 0.618, so 40 of them leave it far
/// below 1e-9 relative.
const REFINE_STEPS: usize = 40;

/// Fills in each step's frequencies on `board` (the trimmed network):
/// the ideal one from the pair's values (the read chain's realized value
/// times its partner's), the one the bench sees by a scan of the network
/// set up for the step, with its own op-amps, refined by bisection of the
/// phase or golden section of the level. A reading the scan cannot find
/// keeps the ideal frequency.
pub(super) fn read_steps(
    steps: &mut [TuningStep],
    board: &Netlist,
    read: &[(Chain, usize)],
) -> Result<(), CircuitError> {
    for (step, &(chain, partner)) in steps.iter_mut().zip(read) {
        let product = chain.realized(board) * value(board, partner);
        let passive_hz = step.frequency_hz;
        step.ideal_frequency_hz = 1.0 / (std::f64::consts::TAU * product.sqrt());
        let net = step.configure(board)?;
        let found = find_reading(&net, step, passive_hz);
        step.found_with_model = found.is_some();
        step.frequency_hz = found.unwrap_or(step.ideal_frequency_hz);
        step.opamp_gain = largest_opamp_gain(&net, step.frequency_hz)?;
    }
    Ok(())
}

/// The largest |V| of an op-amp output of `net` at `freq_hz` per volt at
/// `in` (0 without op-amps).
fn largest_opamp_gain(net: &Netlist, freq_hz: f64) -> Result<f64, CircuitError> {
    let inp = net.require_node("in")?;
    let v = crate::circuit::AcSystem::new(net)?.node_voltages(freq_hz)?;
    Ok(net
        .elements
        .iter()
        .filter_map(|e| match *e {
            Element::OpAmp { out, .. } => Some(v[out].norm() / v[inp].norm()),
            _ => None,
        })
        .fold(0.0, f64::max))
}

/// Where `net` shows `step`'s reading between its ideal frequency and
/// `passive_hz` (the pair's resonance in the passive ideal), each
/// widened by [`SCAN_SPAN`]; a phase crossing nearest `passive_hz`.
fn find_reading(net: &Netlist, step: &TuningStep, passive_hz: f64) -> Option<f64> {
    let mut system = crate::circuit::AcSystem::new(net).ok()?;
    let node = net.node_index(&step.node)?;
    let inp = net.node_index("in")?;
    let f0 = passive_hz;
    let lo = step.ideal_frequency_hz.min(passive_hz) * (1.0 - SCAN_SPAN);
    let hi = step.ideal_frequency_hz.max(passive_hz) * (1.0 + SCAN_SPAN);
    // The sparse solver where its pivot order holds over the scan (a
    // dense solve per point made a 24-converter bandstop's procedure
    // take 2 s); the dense one where it does not.
    let mut sparse = crate::circuit::SparseAc::new(&system, lo, hi).ok();
    let mut one = Vec::with_capacity(1);
    let mut at = |f: f64| {
        let swept = sparse
            .as_mut()
            .is_some_and(|s| s.sweep_into(&[f], node, inp, &mut one).is_ok());
        match swept {
            true => one.first().copied(),
            false => system.transfer(f, node, inp).ok(),
        }
    };
    let per_span = ((1.0 + SCAN_SPAN) / (1.0 - SCAN_SPAN)).ln();
    let points = ((hi / lo).ln() / per_span * SCAN_POINTS as f64).ceil() as usize;
    let grid = crate::circuit::log_grid(lo, hi, points.max(SCAN_POINTS)).ok()?;
    let h: Vec<num_complex::Complex64> = grid.iter().map(|&f| at(f)).collect::<Option<_>>()?;
    match step.reading {
        Reading::DeepestMinimum => {
            let best = (0..grid.len()).min_by(|&a, &b| h[a].norm().total_cmp(&h[b].norm()))?;
            let (mut lo, mut hi) = (
                grid[best.saturating_sub(1)],
                grid[(best + 1).min(grid.len() - 1)],
            );
            let golden = (5.0_f64.sqrt() - 1.0) / 2.0;
            for _ in 0..REFINE_STEPS {
                let (x1, x2) = (hi - golden * (hi - lo), lo + golden * (hi - lo));
                if at(x1)?.norm() < at(x2)?.norm() {
                    hi = x2;
                } else {
                    lo = x1;
                }
            }
            Some((lo + hi) / 2.0)
        }
        Reading::InPhase => {
            // The sign change of the phase nearest the ideal frequency
            // (not the wrap at +-pi).
            let i = (1..grid.len())
                .filter(|&i| {
                    let (p0, p1) = (h[i - 1].arg(), h[i].arg());
                    p0.signum() != p1.signum() && (p0 - p1).abs() < 1.0
                })
                .min_by(|&a, &b| (grid[a] - f0).abs().total_cmp(&(grid[b] - f0).abs()))?;
            let (mut lo, mut hi) = (grid[i - 1], grid[i]);
            let sign = h[i - 1].arg().signum();
            for _ in 0..REFINE_STEPS {
                let mid = (lo + hi) / 2.0;
                if at(mid)?.arg().signum() == sign {
                    lo = mid;
                } else {
                    hi = mid;
                }
            }
            Some((lo + hi) / 2.0)
        }
    }
}

/// The generator level for a tuning step, volt peak: the 1-2-5 value at
/// or below 1 V that keeps every op-amp output within half its swing
/// (`opamp_gain` volt per volt at the input): small enough that no
/// op-amp clips, large enough to read on a bench (common practice).
pub fn generator_level_v(opamp_gain: f64, swing_v_peak: f64) -> f64 {
    let most = (swing_v_peak / (2.0 * opamp_gain)).min(1.0);
    if !(most.is_finite() && most > 0.0) {
        return 1.0;
    }
    let decade = 10f64.powf(most.log10().floor());
    [5.0, 2.0, 1.0]
        .into_iter()
        .map(|m| m * decade)
        .find(|&v| v <= most * (1.0 + 1e-12))
        .unwrap_or(decade)
}

#[cfg(test)]
mod tests {
    use super::generator_level_v;

    /// The generator level is the 1-2-5 value (common practice) at or
    /// below both 1 V and half the swing over the largest op-amp gain.
    #[test]
    fn generator_levels_keep_half_the_swing() {
        assert_eq!(generator_level_v(1.5, 12.0), 1.0);
        assert_eq!(generator_level_v(10.0, 12.0), 0.5);
        assert_eq!(generator_level_v(30.0, 12.0), 0.2);
        assert_eq!(generator_level_v(100.0, 12.0), 0.05);
        assert_eq!(generator_level_v(0.0, 12.0), 1.0);
    }
}

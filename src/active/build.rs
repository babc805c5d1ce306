//! Assembling the active network of each method from an oriented passive
//! netlist and the converters' free values.
//!
//! Invariants of every assembled netlist: the same contract as the
//! passive one (source `V` from `in` to ground, output at `out`), every
//! op-amp with the one model asked for, and one [`Stage`] per replaced
//! element naming all it added.
//!
//! # Simulated inductors
//! Every passive element is kept except the inductors; each inductor with
//! one end at ground becomes a grounded GIC inductor, every other one a
//! floating inductor (see [`super::gic`]).
//!
//! # FDNR image (Bruton 1969, IEEE Trans. Circuit Theory 16)
//! Dividing every impedance by s tau leaves every voltage ratio unchanged:
//! R becomes a capacitor tau/R, L a resistor L/tau, C an FDNR
//! Zin = 1/(s^2 D) with D = C tau. The terminations become capacitors,
//! which leave the FDNR op-amp inputs without a DC path, so a resistor
//! sits across each: Rb across the load capacitor and Ra across the source
//! one with Rb/(Ra + Rser + Rb) = RL/(RS + RL), Rser being the DC
//! resistance of the image between them, so the DC gain is the ladder's
//! (checked by tests/active.rs, fdnr_dc_gain_is_the_ladders). A unity-gain
//! follower drives `out` from the high-impedance load node, renamed
//! `ladder_out`.
//!
//! Size of the DC-path resistors: in the image the source and load
//! branches are exactly RS and RL times sT/(1 + sT), T = Ra CS or Rb CL
//! (their time constants), so above 1/T they act as RS and RL perturbed by
//! about 1/(w T) relative. Rb = T RL / tau with T = K / wb for the factor K
//! of [`super::Options::dc_path_factor`]: the deviation is of order 1/K
//! near the balance frequency and DC is exact.

use crate::circuit::{AcSystem, Element, ElementKind, Netlist, OpAmpModel};

use super::chain::Chain;
use super::compensate::compensate;
use super::error::ActiveError;
use super::gic::{
    add_fresh, fdnr_chain, fresh_node, inductor_chain, place_floating, place_grounded, Placed,
    Tuning,
};
use super::passive::{grounded_at, Passive};
use super::{Handles, Stage, StageKind};

/// The FDNR image's fixed quantities.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Bruton {
    /// Every impedance is divided by s tau, s.
    pub tau_s: f64,
    /// Element index of the source termination (from `in`).
    pub source: usize,
    /// Element index of the load termination (from `out` to ground).
    pub load: usize,
    /// The DC-path resistors across the source and load capacitors, ohm.
    pub dc_path_ohm: [f64; 2],
}

/// What one method builds from.
#[derive(Debug, Clone)]
pub(crate) enum Plan {
    /// Simulated inductors.
    Gic(Passive),
    /// The FDNR image.
    Fdnr(Passive, Bruton),
}

/// What the FDNR image needs, in words (for [`ActiveError::NotApplicable`]).
pub(crate) const FDNR_NEEDS: &str = "a lowpass ladder: a source resistor from \"in\", a load resistor from \"out\" to ground, every capacitor grounded (after series swaps), no inductor to ground and no other resistor";

/// Name of the ladder's output node in the FDNR image.
const LADDER_OUT: &str = "ladder_out";

/// A new netlist with the passive one's title (tagged) and nodes.
fn start(passive: &Passive, tag: &str) -> Netlist {
    Netlist {
        title: format!("{} ({tag})", passive.netlist.title),
        nodes: passive.netlist.nodes.clone(),
        elements: Vec::new(),
    }
}

/// The stage of what `p` placed for `replaces`, with its typed handles:
/// a converter's chains in the order [`super::gic`] places them (Z1..Z5;
/// a floating inductor's two GICs, then their shared Z5).
fn stage(
    netlist: &Netlist,
    kind: StageKind,
    replaces: &Element,
    value: f64,
    nodes: Vec<String>,
    p: Placed,
) -> Result<Stage, ActiveError> {
    let chain = |z: [usize; 5]| {
        Chain::read(netlist, z).ok_or_else(|| ActiveError::Contract {
            problem: format!("the converter for {} is no GIC chain", replaces.name()),
        })
    };
    let handles = match (kind, &p.indices[..]) {
        (StageKind::GroundedInductor | StageKind::Fdnr, &[z1, z2, z3, z4, z5]) => {
            Handles::Converter(vec![chain([z1, z2, z3, z4, z5])?])
        }
        (StageKind::FloatingInductor, &[a1, a2, a3, a4, b1, b2, b3, b4, z5]) => {
            Handles::Converter(vec![
                chain([a1, a2, a3, a4, z5])?,
                chain([b1, b2, b3, b4, z5])?,
            ])
        }
        (StageKind::Termination, &[capacitor, dc_path]) => {
            Handles::Termination { capacitor, dc_path }
        }
        (StageKind::Resistor, &[element]) => Handles::Element(element),
        _ => {
            return Err(ActiveError::Contract {
                problem: format!(
                    "the {kind} for {} placed {} elements",
                    replaces.name(),
                    p.indices.len()
                ),
            })
        }
    };
    Ok(Stage {
        kind,
        replaces: Some(replaces.name().to_string()),
        value,
        nodes,
        elements: p.elements,
        opamps: p.opamps,
        handles,
    })
}

/// The simulated-inductor network.
pub(crate) fn assemble_gic(
    passive: &Passive,
    tuning: &Tuning,
    model: OpAmpModel,
) -> Result<(Netlist, Vec<Stage>), ActiveError> {
    let mut netlist = start(passive, "simulated inductors");
    let mut stages = Vec::new();
    for element in &passive.netlist.elements {
        let &Element::Inductor {
            ref name,
            a,
            b,
            henry,
        } = element
        else {
            netlist.elements.push(element.clone());
            continue;
        };
        let chain = inductor_chain(henry, tuning);
        let names = |nodes: &[usize]| nodes.iter().map(|&n| netlist.nodes[n].clone()).collect();
        let built = match grounded_at(element) {
            Some(node) => {
                let nodes = names(&[node]);
                let placed = place_grounded(&mut netlist, name, node, chain, model)?;
                stage(
                    &netlist,
                    StageKind::GroundedInductor,
                    element,
                    henry,
                    nodes,
                    placed,
                )?
            }
            None => {
                let nodes = names(&[a, b]);
                let placed = place_floating(&mut netlist, name, (a, b), chain, model)?;
                stage(
                    &netlist,
                    StageKind::FloatingInductor,
                    element,
                    henry,
                    nodes,
                    placed,
                )?
            }
        };
        stages.push(built);
    }
    Ok((netlist, stages))
}

/// Op-amps the simulated-inductor network needs: 2 per grounded inductor,
/// 4 per floating one.
pub(crate) fn gic_opamps(passive: &Passive) -> usize {
    passive
        .netlist
        .elements
        .iter()
        .filter(|e| e.kind() == ElementKind::Inductor)
        .map(|e| if grounded_at(e).is_some() { 2 } else { 4 })
        .sum()
}

/// Op-amps of the FDNR image: 2 per capacitor and the output buffer.
pub(crate) fn fdnr_opamps(passive: &Passive) -> usize {
    2 * passive.netlist.count(ElementKind::Capacitor) + 1
}

/// Finds the terminations, or names what keeps the ladder from an FDNR
/// image.
pub(crate) fn bruton_terminations(passive: &Passive) -> Result<(usize, usize), String> {
    let n = &passive.netlist;
    let at_input: Vec<usize> = (0..n.elements.len())
        .filter(|&i| {
            let e = &n.elements[i];
            e.kind() != ElementKind::VoltageSource
                && e.terminals().iter().any(|t| t.0 == passive.input)
        })
        .collect();
    let source = match at_input[..] {
        [i] if n.elements[i].kind() == ElementKind::Resistor
            && grounded_at(&n.elements[i]).is_none() =>
        {
            i
        }
        _ => {
            return Err(
                "node \"in\" does not lead into the ladder through a single resistor".to_string(),
            )
        }
    };
    let load = (0..n.elements.len())
        .find(|&i| {
            let e = &n.elements[i];
            e.kind() == ElementKind::Resistor && grounded_at(e) == Some(passive.output)
        })
        .ok_or_else(|| "there is no resistor from \"out\" to ground".to_string())?;
    for (i, e) in n.elements.iter().enumerate() {
        let ground = grounded_at(e);
        let problem = match e.kind() {
            ElementKind::Resistor if i != source && i != load => "is a resistor inside the ladder",
            ElementKind::Capacitor if ground.is_none() => "is a capacitor with no end at ground",
            ElementKind::Inductor if ground.is_some() => "is an inductor to ground",
            _ => continue,
        };
        return Err(format!("{} {problem}", e.name()));
    }
    Ok((source, load))
}

/// The FDNR image. `bruton.dc_path_ohm` must be set (see
/// [`dc_path_resistors`]).
pub(crate) fn assemble_fdnr(
    passive: &Passive,
    bruton: &Bruton,
    tuning: &Tuning,
    model: OpAmpModel,
) -> Result<(Netlist, Vec<Stage>), ActiveError> {
    let mut netlist = start(passive, "FDNR image");
    if netlist.node_index(LADDER_OUT).is_some() {
        return Err(ActiveError::NameClash {
            name: LADDER_OUT.to_string(),
            purpose: "the renamed load node of the FDNR image".to_string(),
        });
    }
    netlist.nodes[passive.output] = LADDER_OUT.to_string();
    let out = fresh_node(&mut netlist, "out")?;
    let tau = bruton.tau_s;
    let mut stages = Vec::new();
    for (i, element) in passive.netlist.elements.iter().enumerate() {
        let built = match *element {
            Element::Resistor {
                ref name,
                a,
                b,
                ohm,
            } => {
                let dc = bruton.dc_path_ohm[usize::from(i == bruton.load)];
                termination(&mut netlist, name, (a, b), tau / ohm, dc, element)?
            }
            Element::Inductor {
                ref name,
                a,
                b,
                henry,
            } => {
                let resistor = Element::Resistor {
                    name: format!("R_{name}"),
                    a,
                    b,
                    ohm: henry / tau,
                };
                let placed = Placed {
                    indices: vec![netlist.elements.len()],
                    elements: vec![add_fresh(&mut netlist, resistor)?],
                    opamps: Vec::new(),
                };
                let nodes = vec![netlist.nodes[a].clone(), netlist.nodes[b].clone()];
                stage(
                    &netlist,
                    StageKind::Resistor,
                    element,
                    henry / tau,
                    nodes,
                    placed,
                )?
            }
            Element::Capacitor {
                ref name, farad, ..
            } => {
                // bruton_terminations let only grounded capacitors through.
                let node = grounded_at(element).unwrap_or(0);
                let d = farad * tau;
                let placed =
                    place_grounded(&mut netlist, name, node, fdnr_chain(d, tuning), model)?;
                let nodes = vec![netlist.nodes[node].clone()];
                stage(&netlist, StageKind::Fdnr, element, d, nodes, placed)?
            }
            _ => {
                netlist.elements.push(element.clone());
                continue;
            }
        };
        stages.push(built);
    }
    stages.push(buffer(&mut netlist, passive.output, out, model)?);
    Ok((netlist, stages))
}

/// A termination resistor's image: a capacitor with its DC-path resistor
/// across it.
fn termination(
    netlist: &mut Netlist,
    name: &str,
    (a, b): (usize, usize),
    farad: f64,
    dc_ohm: f64,
    replaces: &Element,
) -> Result<Stage, ActiveError> {
    let capacitor = Element::Capacitor {
        name: format!("C_{name}"),
        a,
        b,
        farad,
    };
    let resistor = Element::Resistor {
        name: format!("R_{name}"),
        a,
        b,
        ohm: dc_ohm,
    };
    let first = netlist.elements.len();
    let placed = Placed {
        elements: vec![
            add_fresh(netlist, capacitor)?,
            add_fresh(netlist, resistor)?,
        ],
        indices: vec![first, first + 1],
        opamps: Vec::new(),
    };
    let nodes = vec![netlist.nodes[a].clone(), netlist.nodes[b].clone()];
    stage(
        netlist,
        StageKind::Termination,
        replaces,
        farad,
        nodes,
        placed,
    )
}

/// The unity-gain follower from the ladder's load node to `out`.
fn buffer(
    netlist: &mut Netlist,
    ladder_out: usize,
    out: usize,
    model: OpAmpModel,
) -> Result<Stage, ActiveError> {
    let follower = Element::OpAmp {
        name: "X_BUF".to_string(),
        plus: ladder_out,
        minus: out,
        out,
        model,
    };
    Ok(Stage {
        kind: StageKind::Buffer,
        replaces: None,
        value: 1.0,
        nodes: vec![netlist.nodes[ladder_out].clone(), "out".to_string()],
        elements: Vec::new(),
        opamps: vec![add_fresh(netlist, follower)?],
        handles: Handles::Buffer,
    })
}

/// Sets the DC-path resistors of `bruton` for the factor `k` (wb T), or
/// the smaller factor that keeps both within `max_ohm`: Rb = T RL / tau,
/// and Ra from the DC-gain rule with Rser measured by a DC solve of the
/// image (ideal op-amps, which draw no input current, so the FDNR inputs
/// are open at DC and the image is Ra, Rser, Rb in series; Ra is below
/// its open value Rb RS / RL, so bounding that bounds Ra).
pub(crate) fn dc_path_resistors(
    passive: &Passive,
    bruton: &mut Bruton,
    tuning: &Tuning,
    k: f64,
    max_ohm: f64,
) -> Result<(), ActiveError> {
    let value = |i: usize| passive.netlist.elements[i].value().unwrap_or(f64::NAN);
    let (rs, rl) = (value(bruton.source), value(bruton.load));
    let per_k = rl.max(rs) / (tuning.balance_rad_s * bruton.tau_s);
    let k = k.min(max_ohm / per_k);
    let rb = k / tuning.balance_rad_s * rl / bruton.tau_s;
    let ra_open = rb * rs / rl;
    bruton.dc_path_ohm = [ra_open, rb];
    let (image, _) = assemble_fdnr(passive, bruton, tuning, OpAmpModel::Ideal)?;
    let v = AcSystem::new(&image)?.node_voltages(0.0)?;
    let ladder_in = passive.netlist.elements[bruton.source]
        .terminals()
        .iter()
        .map(|t| t.0)
        .find(|&node| node != passive.input)
        .unwrap_or(0);
    let (v1, v2) = (v[ladder_in].re, v[passive.output].re);
    let ra = ra_open - (v1 - v2) * rb / v2;
    if !(ra > 0.0 && ra.is_finite()) {
        return Err(ActiveError::DcPath {
            source_ohm: rs,
            load_ohm: rl,
        });
    }
    bruton.dc_path_ohm[0] = ra;
    Ok(())
}

impl Plan {
    /// The network and its stages for these free values and op-amps,
    /// each converter compensated when the tuning asks for it.
    pub fn assemble(
        &self,
        tuning: &Tuning,
        model: OpAmpModel,
    ) -> Result<(Netlist, Vec<Stage>), ActiveError> {
        let (mut netlist, stages) = match self {
            Plan::Gic(p) => assemble_gic(p, tuning, model),
            Plan::Fdnr(p, b) => assemble_fdnr(p, b, tuning, model),
        }?;
        if tuning.compensate {
            let method = match self {
                Plan::Gic(_) => super::Method::Gic,
                Plan::Fdnr(..) => super::Method::Fdnr,
            };
            compensate(&mut netlist, &stages, model, tuning.balance_rad_s, method)?;
        }
        Ok((netlist, stages))
    }
}

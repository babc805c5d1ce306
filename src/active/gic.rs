//! The Antoniou generalized impedance converter (GIC) and the three
//! converters built from it: the grounded simulated inductor, the grounded
//! frequency-dependent negative resistor (FDNR) and the floating simulated
//! inductor.
//!
//! # The two-port
//! A chain of impedances Z1..Z4 runs from port 1 (node `p`) through nodes
//! `a`, `b`, `c` to port 2 (node `d`); the load Z5 hangs on port 2.
//! Op-amp 1 drives `a`, op-amp 2 drives `c`. With ideal op-amps the virtual
//! shorts hold `p`, `b` and `d` at one voltage V, and no current enters an
//! op-amp input, so with I1 the current into port 1:
//! Z1 carries I1, Z2 then carries -I1 Z1/Z2 (it ends at b = V), Z3 the
//! same, so V(c) = V + I1 Z1 Z3/Z2, and Z4 carries I1 Z1 Z3/(Z2 Z4) into
//! port 2. Port 2 therefore sits at the port-1 voltage and delivers the
//! port-1 current times h = Z1 Z3/(Z2 Z4). Loaded by Z5 to ground:
//! Zin = Z1 Z3 Z5/(Z2 Z4) (Antoniou 1969, Proc. IEE 116, the GIC
//! relation; common practice).
//!
//! # Op-amp polarities
//! The ideal relation only needs two of the three equalities V(p) = V(b)
//! = V(d); which op-amp holds which, and with which polarity, decides
//! stability. Of the 24 assignments, an exhaustive search with single-pole
//! op-amps (A0 = 1e5, GBW 1 and 10 MHz, equal and mixed) on the inductor
//! and FDNR chains, with port 1 terminated from 1 ohm to 10 Mohm, leaves
//! two with every natural frequency in the left half plane
//! (tests/active.rs repeats the search; a wider one over impedance ratios
//! from 1/10 to 10 and RC terminations kept the same two free of any
//! GBW-scale growth). Of those two, the one used here also cancels the
//! first-order loss of the balanced converter (measured loss tangent 4e-5
//! at GBW/f = 1000, set by A0, against a negative resistance of 2e-3 for
//! the other):
//! - op-amp 1 (output `a`): non-inverting input at port 2 (`d`),
//!   inverting input at `b`;
//! - op-amp 2 (output `c`): non-inverting input at port 1 (`p`),
//!   inverting input at `b`.
//!
//! Both inverting inputs sit on `b`, which each output reaches through one
//! impedance (Z2 from `a`, Z3 from `c`): each op-amp has local negative
//! feedback. An earlier arrangement for the inductor with its capacitor
//! in position 2 (op-amp 1 between `p` and `b`, op-amp 2 between `b` and
//! `d`) grows at about 1e4 1/s when port 1 is left open (measured by
//! tests/active.rs, opamp_polarities_come_from_an_exhaustive_search), so
//! it is not used. tests/active.rs re-proves the choice on realized
//! filters (natural frequencies and ngspice step responses) and shows
//! that swapping either op-amp's inputs makes them diverge.
//!
//! # Balanced values
//! With single-pole op-amps (A = wt/s) the converter errs by about 4 w/wt
//! in value; its loss term cancels when the impedances that set the op-amp
//! loop gains are equal at the balance frequency wb (measured with this
//! arrangement on the inductor at GBW/f = 1000: Z4 10 % high gives a loss
//! tangent of -1.5e-4, a negative resistance, Z5 10 % high +2.4e-4; Z2 and
//! Z3 act alike on the FDNR). Z1 sits outside both loops (scaling it
//! scales Zin and nothing else, to rounding), so it is the element that
//! trims the value:
//! - inductor (capacitor in position 2): Z2 = C, Z3 = Z4 = Z5 = R,
//!   wb C R = 1, and R1 = wb L since L = C R1 R3 R5 / R4;
//! - FDNR (capacitors in positions 1 and 5), Zin = 1/(s^2 D):
//!   Z2 = Z3 = Z4 = R, Z5 = C5 with wb C5 R = 1, and C1 = wb D since
//!   D = C1 C5 R2 R4 / R3 (not its reciprocal R3 / (C^2 R2 R4): the
//!   chain's Zin, checked in tests/active.rs,
//!   gic_two_port_gives_z1_z3_z5_over_z2_z4, gives this one).
//!
//! The capacitor sits in position 2 rather than 4 so that the floating
//! inductor (below) keeps a DC path to every op-amp input.
//!
//! # Floating inductor
//! Two inductor GICs with their ports 1 at the two ends A and B of the
//! inductor, and one resistor R5 between their ports 2. Port 2 of each
//! follows its port 1, so R5 carries (V_A - V_B)/R5; GIC A delivers that
//! current from port 2, so I_A = (V_A - V_B)/(h R5), and GIC B absorbs it,
//! so I_B = -I_A: a floating impedance h R5 = s C R1 R3 R5 / R4, the same
//! L as the grounded inductor with R5 as its load (common practice, from
//! the two-port relation above). Balanced with R5 = R: halving R5 gave a
//! right-half-plane root between resistive terminations (measured), R and
//! 2 R none.
//!
//! At DC h vanishes, so only the op-amps' finite gain ties I_B to I_A:
//! with ideal op-amps the equations are singular at exactly 0 Hz (the AC
//! response is exact at any other frequency), and with single-pole ones a
//! slow real natural frequency remains (measured -0.006 to -0.25 1/s for
//! A0 from 1e4 to 1e6, GBW 1 to 10 MHz and 1 % parts), which the
//! stability verdict weighs like any other.

use crate::circuit::{Element, Netlist, OpAmpModel};

use super::error::ActiveError;

/// One impedance of a converter chain.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Impedance {
    /// A resistor, ohm.
    Resistor(f64),
    /// A capacitor, farad.
    Capacitor(f64),
}

/// What one [`place_gic`] (or a whole converter) added.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Placed {
    /// The passive elements (R and C) by name, in chain order.
    pub elements: Vec<String>,
    /// The same by index in the netlist.
    pub indices: Vec<usize>,
    /// The op-amps.
    pub opamps: Vec<String>,
}

/// A node that must not exist yet.
pub(crate) fn fresh_node(netlist: &mut Netlist, name: &str) -> Result<usize, ActiveError> {
    if netlist.node_index(name).is_some() {
        return Err(ActiveError::NameClash {
            name: name.to_string(),
            purpose: "a converter node".to_string(),
        });
    }
    Ok(netlist.node(name))
}

/// Appends an element whose name must not exist yet; returns its name.
pub(crate) fn add_fresh(netlist: &mut Netlist, element: Element) -> Result<String, ActiveError> {
    let name = element.name().to_string();
    if netlist.element_index(&name).is_some() {
        return Err(ActiveError::NameClash {
            name,
            purpose: "a converter element".to_string(),
        });
    }
    netlist.add(element)?;
    Ok(name)
}

/// An R or C element named `R_<tag>_<position>` or `C_<tag>_<position>`.
fn impedance_element(z: Impedance, tag: &str, position: usize, a: usize, b: usize) -> Element {
    match z {
        Impedance::Resistor(ohm) => Element::Resistor {
            name: format!("R_{tag}_{position}"),
            a,
            b,
            ohm,
        },
        Impedance::Capacitor(farad) => Element::Capacitor {
            name: format!("C_{tag}_{position}"),
            a,
            b,
            farad,
        },
    }
}

/// Adds the impedance `z` at `position` of converter `tag` between `a`
/// and `b`, recording its name.
pub(crate) fn add_impedance(
    netlist: &mut Netlist,
    placed: &mut Placed,
    z: Impedance,
    tag: &str,
    position: usize,
    (a, b): (usize, usize),
) -> Result<(), ActiveError> {
    placed.indices.push(netlist.elements.len());
    let name = add_fresh(netlist, impedance_element(z, tag, position, a, b))?;
    placed.elements.push(name);
    Ok(())
}

/// Places the GIC two-port Z1..Z4 with its two op-amps (polarities as in
/// the module documentation) from `port1`, and returns port 2 (node
/// `<tag>_d`, where the caller attaches Z5). Nodes are named `<tag>_a` to
/// `<tag>_d`, elements `R_<tag>_k` / `C_<tag>_k`, op-amps `X_<tag>_1`
/// (output `a`) and `X_<tag>_2` (output `c`).
pub fn place_gic(
    netlist: &mut Netlist,
    tag: &str,
    port1: usize,
    z: &[Impedance; 4],
    model: OpAmpModel,
    placed: &mut Placed,
) -> Result<usize, ActiveError> {
    let mut chain = vec![port1];
    for suffix in ["a", "b", "c", "d"] {
        chain.push(fresh_node(netlist, &format!("{tag}_{suffix}"))?);
    }
    for (k, &zk) in z.iter().enumerate() {
        add_impedance(netlist, placed, zk, tag, k + 1, (chain[k], chain[k + 1]))?;
    }
    let (a, b, c, d) = (chain[1], chain[2], chain[3], chain[4]);
    for (name, plus, out) in [
        (format!("X_{tag}_1"), d, a),
        (format!("X_{tag}_2"), port1, c),
    ] {
        let op = Element::OpAmp {
            name,
            plus,
            minus: b,
            out,
            model,
        };
        placed.opamps.push(add_fresh(netlist, op)?);
    }
    Ok(d)
}

/// Free values of one converter, shared by every converter of a build.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Tuning {
    /// Impedance level R of the balanced elements, ohm.
    pub level_ohm: f64,
    /// Balance frequency wb, rad/s: the capacitor of each loop has
    /// reactance R there.
    pub balance_rad_s: f64,
    /// Factor on the trim element's ideal value (1 = exact with ideal
    /// op-amps), to pre-distort against op-amp errors.
    pub correction: f64,
    /// Whether each converter's Z1 is then scaled so its value is exact
    /// at the balance frequency with the op-amp model (see
    /// `compensate.rs`).
    pub compensate: bool,
}

/// Z1..Z5 of the balanced grounded inductor of `henry` (capacitor in
/// position 2): L = C R1 R3 R5 / R4 with R3 = R4 = R5 = R and wb C R = 1.
pub(crate) fn inductor_chain(henry: f64, t: &Tuning) -> ([Impedance; 4], Impedance) {
    let r = t.level_ohm;
    let c = 1.0 / (t.balance_rad_s * r);
    let r1 = t.correction * henry * r / (c * r * r);
    (
        [
            Impedance::Resistor(r1),
            Impedance::Capacitor(c),
            Impedance::Resistor(r),
            Impedance::Resistor(r),
        ],
        Impedance::Resistor(r),
    )
}

/// Z1..Z5 of the balanced grounded FDNR Zin = 1/(s^2 D) (capacitors in
/// positions 1 and 5): D = C1 C5 R2 R4 / R3 with R2 = R3 = R4 = R and
/// wb C5 R = 1.
pub(crate) fn fdnr_chain(d: f64, t: &Tuning) -> ([Impedance; 4], Impedance) {
    let r = t.level_ohm;
    let c5 = 1.0 / (t.balance_rad_s * r);
    let c1 = t.correction * d * r / (c5 * r * r);
    (
        [
            Impedance::Capacitor(c1),
            Impedance::Resistor(r),
            Impedance::Resistor(r),
            Impedance::Resistor(r),
        ],
        Impedance::Capacitor(c5),
    )
}

/// Places a grounded converter (chain Z1..Z4 and Z5 from port 2 to
/// ground) at `node`.
pub(crate) fn place_grounded(
    netlist: &mut Netlist,
    tag: &str,
    node: usize,
    (z, z5): ([Impedance; 4], Impedance),
    model: OpAmpModel,
) -> Result<Placed, ActiveError> {
    let mut placed = Placed::default();
    let port2 = place_gic(netlist, tag, node, &z, model, &mut placed)?;
    add_impedance(netlist, &mut placed, z5, tag, 5, (port2, 0))?;
    Ok(placed)
}

/// Places the floating inductor between `a` and `b`: GICs `<tag>A` and
/// `<tag>B` with the chain of [`inductor_chain`], joined at their ports 2
/// by its Z5 (named `R_<tag>_5`).
pub(crate) fn place_floating(
    netlist: &mut Netlist,
    tag: &str,
    (a, b): (usize, usize),
    (z, z5): ([Impedance; 4], Impedance),
    model: OpAmpModel,
) -> Result<Placed, ActiveError> {
    let mut placed = Placed::default();
    let da = place_gic(netlist, &format!("{tag}A"), a, &z, model, &mut placed)?;
    let db = place_gic(netlist, &format!("{tag}B"), b, &z, model, &mut placed)?;
    add_impedance(netlist, &mut placed, z5, tag, 5, (da, db))?;
    Ok(placed)
}

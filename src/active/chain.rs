//! The converters of an active build seen as GIC chains: the value each
//! realizes, and the two freedoms that move its capacitors without
//! changing that value. The parts stage ([`crate::realize`]) rescales,
//! snaps and trims converters through these.
//!
//! # Realized value
//! A chain Z1..Z5 has Zin = Z1 Z3 Z5 / (Z2 Z4) with ideal op-amps
//! (Antoniou 1969, Proc. IEE 116, the GIC relation; common practice; see
//! [`crate::active::gic`]). A resistor in position p contributes R^s, a
//! capacitor (1/(sC))^s, with s = +1 for odd p and -1 for even p, so
//! Zin = K s^n for a monomial K of the element values with exponents +-1.
//! An inductor has n = 1 and L = K (capacitor in position 2:
//! L = C2 R1 R3 R5 / R4); an FDNR has n = -2 and D = 1/K (capacitors in
//! positions 1 and 5: D = C1 C5 R2 R4 / R3). Either way the realized value
//! q = K^sign(n) is a product of element values with exponents +-1, which
//! is what the trim solve and the rescaling rely on.
//!
//! # Freedoms
//! - Level: every impedance Z2..Z5 times k. Zin keeps Z3 Z5 / (Z2 Z4),
//!   and the ratios Z2:Z3 and Z4:Z5 that balance the op-amp loops (see
//!   [`crate::active::gic`]) stay as they were, so the op-amp error does
//!   not change to first order. A capacitor in positions 2 to 5 goes to
//!   C/k. This is the "C -> C/k, R -> k R" rescaling of common practice,
//!   applied to the whole loop part of the chain rather than one resistor,
//!   so the balance survives.
//! - Balance shift: Z1 times m and Z5 divided by m. Zin is unchanged; a
//!   capacitor in position 1 goes to C1/m. The level freedom cannot move
//!   that capacitor (an FDNR's C1 = wb D is fixed by its balance
//!   frequency wb), so this one trades it against C5: with Z4 a resistor
//!   and Z5 a capacitor, Z4 and Z5 now balance at wb/m. The Z2:Z3 ratio,
//!   which sets the loss term, does not change.
//!
//! A floating inductor is two chains sharing Z5; every freedom applies to
//! both chains at once, so both keep their value.

use crate::circuit::{CircuitError, Element, ElementKind, Netlist};

/// One GIC chain of a converter, by element index in its build's netlist
/// (typed handles: the parts stage never looks elements up by name).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Chain {
    /// Z1..Z5 as element indices.
    pub z: [usize; 5],
    /// The exponent of each in the realized value (see the module
    /// documentation).
    pub exponents: [i32; 5],
    /// The position (0 for Z1) of the trimming resistor.
    pub trim: usize,
}

/// How one converter's capacitors were moved.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Moves {
    /// The balance-shift factor m (1 when Z1 is a resistor).
    pub balance: f64,
    /// The level factor k (1 without a capacitor in positions 2 to 5).
    pub level: f64,
}

/// Whether element `index` is a capacitor.
pub fn is_capacitor(netlist: &Netlist, index: usize) -> bool {
    netlist.elements[index].kind() == ElementKind::Capacitor
}

/// The value of element `index` (NaN for an element without one, which a
/// chain never holds: [`Chain::read`] checks its kinds).
pub fn value(netlist: &Netlist, index: usize) -> f64 {
    netlist.elements[index].value().unwrap_or(f64::NAN)
}

impl Chain {
    /// The chain of elements `z`, its exponents and its trimming resistor;
    /// `None` when an element is no resistor or capacitor, or the chain
    /// has as many capacitors in odd as in even positions (it realizes no
    /// L or D), or no resistor in positions 1, 2 or 4 to trim it with.
    pub fn read(netlist: &Netlist, z: [usize; 5]) -> Option<Chain> {
        let plain = z.iter().all(|&i| {
            matches!(
                netlist.elements.get(i).map(Element::kind),
                Some(ElementKind::Resistor | ElementKind::Capacitor)
            )
        });
        if !plain {
            return None;
        }
        let exponents = exponents(netlist, &z)?;
        let trim = trim_position(z.map(|i| is_capacitor(netlist, i)))?;
        Some(Chain { z, exponents, trim })
    }

    /// The value it realizes with ideal op-amps: henry or farad second.
    pub fn realized(&self, netlist: &Netlist) -> f64 {
        self.z
            .iter()
            .zip(self.exponents)
            .map(|(&index, e)| value(netlist, index).powi(e))
            .product()
    }

    /// The index of its trimming resistor.
    pub fn trim_element(&self) -> usize {
        self.z[self.trim]
    }
}

/// The position of the trimming resistor: Z1 when it is a resistor,
/// since it sits outside both op-amp loops (scaling it scales Zin and
/// nothing else, see [`crate::active::gic`]); otherwise (an FDNR, whose
/// Z1 is a capacitor) Z2, then Z4. On the FDNR demo (tests/snap.rs)
/// trimming Z2 left 0.0937 dB of passband error and Z4 0.0940 dB: the
/// two differ only in which op-amp balance the trim disturbs, by about
/// the resistor snapping step, and little either way.
fn trim_position(capacitor: [bool; 5]) -> Option<usize> {
    [0, 1, 3].into_iter().find(|&p| !capacitor[p])
}

/// The exponent of each element of a chain in its realized value (see the
/// module documentation), or `None` for a chain with as many capacitors
/// in odd as in even positions, whose Zin does not depend on frequency.
fn exponents(netlist: &Netlist, chain: &[usize; 5]) -> Option<[i32; 5]> {
    let mut k = [0; 5];
    let mut power = 0_i32;
    for (p, (&index, e)) in chain.iter().zip(&mut k).enumerate() {
        // Positions 1, 3, 5 (p = 0, 2, 4) are in the numerator.
        let s = if p % 2 == 0 { 1 } else { -1 };
        if is_capacitor(netlist, index) {
            *e = -s;
            power -= s;
        } else {
            *e = s;
        }
    }
    let sign = power.signum();
    (sign != 0).then(|| k.map(|e| e * sign))
}

/// Multiplies the impedance of element `index` by `factor`: R times it,
/// C divided by it.
pub fn scale_impedance(
    netlist: &mut Netlist,
    index: usize,
    factor: f64,
) -> Result<(), CircuitError> {
    let v = value(netlist, index);
    let scaled = match netlist.elements[index] {
        Element::Capacitor { .. } => v / factor,
        _ => v * factor,
    };
    netlist.set_value(index, scaled)
}

/// Puts the capacitors of the first of a converter's `chains` (a floating
/// inductor's two share Z5) on chosen values, every chain keeping its
/// realized value: a capacitor Z1 on `balance(C1)` by the balance shift,
/// the first capacitor of Z2..Z5 on `level(C)` by the level.
pub fn place<E: From<CircuitError>>(
    chains: &[Chain],
    netlist: &mut Netlist,
    mut balance: impl FnMut(f64) -> Result<f64, E>,
    mut level: impl FnMut(f64) -> Result<f64, E>,
) -> Result<Moves, E> {
    let mut moves = Moves {
        balance: 1.0,
        level: 1.0,
    };
    let Some(first) = chains.first().map(|c| c.z) else {
        return Ok(moves);
    };
    if is_capacitor(netlist, first[0]) {
        let c = value(netlist, first[0]);
        moves.balance = c / balance(c)?;
        for chain in chains {
            scale_impedance(netlist, chain.z[0], moves.balance)?;
        }
        scale_impedance(netlist, first[4], 1.0 / moves.balance)?;
    }
    if let Some(cap) = level_capacitor(chains, netlist) {
        let c = value(netlist, cap);
        moves.level = c / level(c)?;
        scale_level(chains, netlist, moves.level)?;
    }
    Ok(moves)
}

/// The capacitor the level freedom places: the first of Z2..Z5 of the
/// first chain, if any.
pub fn level_capacitor(chains: &[Chain], netlist: &Netlist) -> Option<usize> {
    let first = chains.first()?.z;
    first[1..]
        .iter()
        .copied()
        .find(|&i| is_capacitor(netlist, i))
}

/// The level freedom: Z2..Z5 of every chain times `factor` (a shared Z5
/// once).
pub fn scale_level(
    chains: &[Chain],
    netlist: &mut Netlist,
    factor: f64,
) -> Result<(), CircuitError> {
    let Some(load) = chains.first().map(|c| c.z[4]) else {
        return Ok(());
    };
    for chain in chains {
        for &index in &chain.z[1..4] {
            scale_impedance(netlist, index, factor)?;
        }
    }
    scale_impedance(netlist, load, factor)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A product of five values rounds five times, 1.1e-16 each.
    const PRODUCT_TOL: f64 = 1e-15;

    /// A chain of five elements with these kinds and values (capacitor
    /// where `true`), on nodes of their own.
    fn chain(kinds: [bool; 5], values: [f64; 5]) -> (Netlist, Chain) {
        let mut n = Netlist::new("chain");
        for (p, (&c, &v)) in kinds.iter().zip(&values).enumerate() {
            let (a, b) = (n.node(&format!("n{p}")), n.node(&format!("m{p}")));
            let e = if c {
                Element::Capacitor {
                    name: format!("C{p}"),
                    a,
                    b,
                    farad: v,
                }
            } else {
                Element::Resistor {
                    name: format!("R{p}"),
                    a,
                    b,
                    ohm: v,
                }
            };
            n.add(e).unwrap();
        }
        let c = Chain::read(&n, [0, 1, 2, 3, 4]).unwrap();
        (n, c)
    }

    /// The exponents reproduce the closed forms of the four converters of
    /// the GIC relation Zin = Z1 Z3 Z5 / (Z2 Z4) (Antoniou 1969, Proc. IEE
    /// 116; common practice), including the two this crate does not build
    /// (capacitor in position 4; capacitors in 1 and 3).
    #[test]
    fn realized_values_follow_the_gic_relation() {
        let v = [1.1e3, 2.3e-9, 3.7e3, 4.1e3, 5.3e3];
        let (r1, x2, r3, r4, r5) = (v[0], v[1], v[2], v[3], v[4]);
        let (n, c) = chain([false, true, false, false, false], v);
        assert!((c.realized(&n) / (x2 * r1 * r3 * r5 / r4) - 1.0).abs() < PRODUCT_TOL);
        assert_eq!(c.trim, 0);
        let v = [1.1e3, 2.3e3, 3.7e3, 4.1e-9, 5.3e3];
        let (n, c) = chain([false, false, false, true, false], v);
        assert!((c.realized(&n) / (v[3] * v[0] * v[2] * v[4] / v[1]) - 1.0).abs() < PRODUCT_TOL);
        let v = [1.1e-9, 2.3e3, 3.7e3, 4.1e3, 5.3e-9];
        let (n, c) = chain([true, false, false, false, true], v);
        assert!((c.realized(&n) / (v[0] * v[4] * v[1] * v[3] / v[2]) - 1.0).abs() < PRODUCT_TOL);
        assert_eq!(c.trim, 1);
        let v = [1.1e-9, 2.3e3, 3.7e-9, 4.1e3, 5.3e3];
        let (n, c) = chain([true, false, true, false, false], v);
        assert!((c.realized(&n) / (v[0] * v[2] * v[1] * v[3] / v[4]) - 1.0).abs() < PRODUCT_TOL);
    }

    /// A chain with no frequency dependence realizes no L or D.
    #[test]
    fn a_resistive_chain_is_refused() {
        let mut n = Netlist::new("chain");
        for p in 0..5 {
            let (a, b) = (n.node(&format!("n{p}")), n.node(&format!("m{p}")));
            let name = format!("R{p}");
            n.add(Element::Resistor {
                name,
                a,
                b,
                ohm: 1e3,
            })
            .unwrap();
        }
        assert!(Chain::read(&n, [0, 1, 2, 3, 4]).is_none());
    }
}

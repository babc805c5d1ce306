//! Pre-distortion of every converter against its op-amps' value error.
//!
//! With finite gain-bandwidth a converter realizes its value times
//! (1 + e(w)), e about 4 w/wt for the balanced chain (first-order analysis
//! of the GIC with A = wt/s; the project's derivation, see
//! [`crate::active::gic`]). The method here measures e instead of using
//! the closed form, so it holds for any op-amp model and for the floating
//! inductor, whose two GICs err differently from one: each converter's
//! chain is rebuilt alone with the op-amp model, its port impedance is
//! solved at the balance frequency (one small dense solve), and its Z1 is
//! scaled so the realized value there is the target again.
//!
//! Why Z1, and why one step is exact: Z1 lies outside both op-amp loops.
//! Given the port voltage, the node equations of `a`, `b`, `c` and `d`
//! (two op-amp gains, current balance at `b` and at `d`) do not contain
//! Z1, so every voltage of the chain is independent of it and the port
//! current (V(p) - V(a)) / Z1 is exactly proportional to 1/Z1: Zin is
//! proportional to Z1 with any op-amp model, and so is the port
//! admittance of the floating inductor (both GICs' Z1 scaled together).
//! Scaling Z1 by the ratio of the realized to the target value therefore
//! cancels the value error at the balance frequency to rounding, not just
//! to first order. It is the element the common trim correction of the
//! refinement already scales ([`super::gic::Tuning::correction`]).
//!
//! The realized value at w: an inductor's L = Im(Zin) / w, that is
//! L Re(Zin / Zideal); an FDNR's D = D Re(Zideal / Zin), Zideal being the
//! GIC relation Z1 Z3 Z5 / (Z2 Z4) at jw (Antoniou 1969, Proc. IEE 116;
//! common practice). The loss part (the imaginary part of the ratio) is
//! left as it is: it vanishes to first order in the balanced chain.

use std::f64::consts::TAU;

use num_complex::Complex64;

use super::chain::{is_capacitor, scale_impedance, value, Chain};
use super::error::ActiveError;
use super::gic::{place_floating, place_grounded, Impedance};
use super::{Handles, Stage};
use crate::circuit::{AcSystem, Element, Netlist, OpAmpModel};

/// Scales Z1 of every converter of `netlist` so that, with op-amps of
/// `model`, it realizes its value exactly at `w_rad_s` (see the module
/// documentation). Nothing changes with ideal op-amps. A converter that
/// realizes an element of the wrong sign there (op-amps far too slow) is
/// [`ActiveError::TooSlow`], named with `method`.
pub(crate) fn compensate(
    netlist: &mut Netlist,
    stages: &[Stage],
    model: OpAmpModel,
    w_rad_s: f64,
    method: super::Method,
) -> Result<(), ActiveError> {
    if model == OpAmpModel::Ideal {
        return Ok(());
    }
    for stage in stages {
        let Handles::Converter(chains) = &stage.handles else {
            continue;
        };
        let ratio = value_ratio(netlist, chains, model, w_rad_s)?;
        // The value goes as Zin^sigma and Zin as Z1: Z1's impedance times
        // ratio^-sigma brings the value to the target.
        let factor = ratio.powi(-sigma(netlist, &chains[0]));
        if !(factor > 0.0 && factor.is_finite()) {
            return Err(ActiveError::TooSlow {
                method,
                replaces: stage.replaces.clone().unwrap_or_default(),
                freq_hz: w_rad_s / TAU,
                opamp: model,
            });
        }
        for chain in chains {
            scale_impedance(netlist, chain.z[0], factor)?;
        }
    }
    Ok(())
}

/// The value the converter of `stage` in `netlist` realizes at
/// `freq_hz` with op-amps of `model` (henry, or farad second for an
/// FDNR; see the module documentation); `None` for a stage that is no
/// converter.
pub fn realized_value(
    netlist: &Netlist,
    stage: &Stage,
    model: OpAmpModel,
    freq_hz: f64,
) -> Result<Option<f64>, ActiveError> {
    let Handles::Converter(chains) = &stage.handles else {
        return Ok(None);
    };
    let ratio = value_ratio(netlist, chains, model, TAU * freq_hz)?;
    Ok(Some(chains[0].realized(netlist) * ratio))
}

/// +1 when the realized value goes as Zin (an inductor, whose Z1 is a
/// resistor with exponent +1), -1 when it goes as 1/Zin (an FDNR, whose
/// Z1 is a capacitor with exponent +1 in D).
fn sigma(netlist: &Netlist, chain: &Chain) -> i32 {
    match is_capacitor(netlist, chain.z[0]) {
        true => -chain.exponents[0],
        false => chain.exponents[0],
    }
}

/// Re((Zin / Zideal)^sigma) of a converter's chains at `w_rad_s`: the
/// realized over the ideal value.
fn value_ratio(
    netlist: &Netlist,
    chains: &[Chain],
    model: OpAmpModel,
    w_rad_s: f64,
) -> Result<f64, ActiveError> {
    let first = &chains[0];
    let ideal = ideal_impedance(netlist, first, w_rad_s);
    let real = port_impedance(netlist, chains, model, w_rad_s, ideal.norm())?;
    let ratio = real / ideal;
    Ok(match sigma(netlist, first) {
        1 => ratio.re,
        _ => ratio.inv().re,
    })
}

/// Z1 Z3 Z5 / (Z2 Z4) of `chain` at jw.
fn ideal_impedance(netlist: &Netlist, chain: &Chain, w_rad_s: f64) -> Complex64 {
    let z = chain.z.map(|i| match is_capacitor(netlist, i) {
        true => 1.0 / Complex64::new(0.0, w_rad_s * value(netlist, i)),
        false => Complex64::new(value(netlist, i), 0.0),
    });
    z[0] * z[2] * z[4] / (z[1] * z[3])
}

/// The port impedance of the converter rebuilt alone from the values of
/// `chains` with op-amps of `model`: port 1 driven from a 1 V source
/// through `source_ohm` (the ideal |Zin|, so the divider is well
/// conditioned), and for a floating inductor (two chains, built with the
/// first chain's values as the build places them) the other end at
/// ground.
fn port_impedance(
    netlist: &Netlist,
    chains: &[Chain],
    model: OpAmpModel,
    w_rad_s: f64,
    source_ohm: f64,
) -> Result<Complex64, ActiveError> {
    let z = chains[0].z.map(|i| match is_capacitor(netlist, i) {
        true => Impedance::Capacitor(value(netlist, i)),
        false => Impedance::Resistor(value(netlist, i)),
    });
    let parts = ([z[0], z[1], z[2], z[3]], z[4]);
    let mut alone = Netlist::new("converter alone");
    let (inp, port) = (alone.node("in"), alone.node("port"));
    alone.add(Element::VoltageSource {
        name: "V1".to_string(),
        pos: inp,
        neg: 0,
        ac_volt: 1.0,
    })?;
    alone.add(Element::Resistor {
        name: "RS".to_string(),
        a: inp,
        b: port,
        ohm: source_ohm,
    })?;
    match chains.len() {
        1 => place_grounded(&mut alone, "X", port, parts, model)?,
        _ => place_floating(&mut alone, "X", (port, 0), parts, model)?,
    };
    let v = AcSystem::new(&alone)?.node_voltages(w_rad_s / TAU)?[port];
    Ok(source_ohm * v / (1.0 - v))
}

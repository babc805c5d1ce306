//! Solving the trimming resistor of each converter chain, and buying it
//! as a fixed resistor in series with a potentiometer.
//!
//! The realized value q of a chain is a product of its element values
//! with exponents +-1 (see [`crate::active::chain`]), so with the trim element at R and
//! exponent e, q(R') = q(R) (R'/R)^e: R' = R (q_target/q)^e restores the
//! target exactly in one step.
//!
//! Buying: with real parts the value the trim must take spreads by about
//! the sum of the tolerances of the chain's five parts, and of its
//! partner's for a resonance trim (first order, worst case; see
//! [`super::TrimGoal`]), so the fixed part is the resistor-series value below
//! value/(1 + spread) and the potentiometer reaches value (1 + spread).
//! With zero tolerances this is the series value just below the solved
//! value and a potentiometer for the rest.

use super::{Buying, PartsChoice, PartsSnapError, TrimGoal};
use crate::active::chain::{value, Chain};
use crate::circuit::Netlist;
use crate::parts::Series;

/// Series of the potentiometers' nominal values. Trimming potentiometers
/// come in far fewer values than fixed resistors; E3 steps (1, 2.2, 4.7)
/// are a common choice (from memory). It only sets the nominal bought,
/// never the solved value.
pub const TRIMMER_SERIES: Series = Series::E3;

/// Relative step below the low end at which the fixed part is looked up,
/// so that a low end that is itself a series value still leaves the
/// potentiometer a range: far below the finest series step (E192, 1.2 %),
/// far above rounding.
const STRICTLY_BELOW: f64 = 1e-6;

/// One trimming resistor: the element of a converter chain whose value
/// restores what the converter realizes, and how to buy it.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Trim {
    /// The passive element the converter replaces.
    #[serde(rename = "converter_for")]
    pub stage: String,
    /// The trimmed resistor.
    #[serde(rename = "designator")]
    pub element: String,
    /// Its index in the build's netlist.
    #[serde(skip)]
    pub index: usize,
    /// The solved value with the snapped parts at their nominal values,
    /// ohm: the value the netlist holds.
    pub value_ohm: f64,
    /// The fixed resistor in series with the potentiometer, from the
    /// resistor series, ohm.
    pub fixed_ohm: f64,
    /// The potentiometer's nominal value (from [`TRIMMER_SERIES`]), ohm.
    pub pot_ohm: f64,
    /// The potentiometer's setting with nominal parts, value - fixed, ohm.
    pub setting_ohm: f64,
    /// The relative spread of the trim value that fixed part and
    /// potentiometer cover: the sum of the tolerances of the chain's parts
    /// (and of the partner's, for a resonance trim).
    pub spread: f64,
    /// What the trim is set for.
    #[serde(flatten)]
    pub goal: TrimGoal,
}

/// Sets the trim element of `chain` so that it realizes `target`, and
/// says how to buy it.
pub(super) fn solve(
    netlist: &mut Netlist,
    stage: &str,
    chain: &Chain,
    target: f64,
    goal: TrimGoal,
    choice: &PartsChoice,
) -> Result<Trim, PartsSnapError> {
    let index = chain.z[chain.trim];
    let ratio = target / chain.realized(netlist);
    let value_ohm = value(netlist, index) * ratio.powi(chain.exponents[chain.trim]);
    netlist.set_value(index, value_ohm)?;
    buy(netlist, stage, chain, index, value_ohm, goal, choice)
}

/// How trim element `index` of `chain`, solved to `value_ohm`, is bought.
fn buy(
    netlist: &Netlist,
    stage: &str,
    chain: &Chain,
    index: usize,
    value_ohm: f64,
    goal: TrimGoal,
    choice: &PartsChoice,
) -> Result<Trim, PartsSnapError> {
    let element = netlist.elements[index].name().to_string();

    // A resonance trim also takes up its partner's tolerance.
    let partner = match goal {
        TrimGoal::Resonance { partner_index, .. } => choice.tolerance_of(netlist, partner_index),
        TrimGoal::Preset => 0.0,
    };
    let spread: f64 = chain
        .z
        .iter()
        .map(|&i| choice.tolerance_of(netlist, i))
        .sum::<f64>()
        + partner;
    let (fixed_ohm, pot_ohm) = fixed_and_pot(value_ohm, spread, choice, &element)?;
    Ok(Trim {
        stage: stage.to_string(),
        element,
        index,
        value_ohm,
        fixed_ohm,
        pot_ohm,
        setting_ohm: value_ohm - fixed_ohm,
        spread,
        goal,
    })
}

/// The fixed resistor (the series value below value / (1 + spread)) and
/// the potentiometer (reaching value (1 + spread)) that buy a trim of
/// `value_ohm`.
fn fixed_and_pot(
    value_ohm: f64,
    spread: f64,
    choice: &PartsChoice,
    element: &str,
) -> Result<(f64, f64), PartsSnapError> {
    let snap = |cause| PartsSnapError::Snap {
        element: element.to_string(),
        cause,
    };
    let low = value_ohm / (1.0 + spread);
    let fixed_ohm = choice
        .resistor_series
        .snap_down(low * (1.0 - STRICTLY_BELOW))
        .map_err(snap)?;
    let pot_ohm = TRIMMER_SERIES
        .snap_up(value_ohm * (1.0 + spread) - fixed_ohm)
        .map_err(snap)?;
    Ok((fixed_ohm, pot_ohm))
}

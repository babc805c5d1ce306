//! Trimmers on a drawn board: left where the design set them, or set
//! again by the tuning procedure for that board's own parts.
//!
//! A trim is one resistor in the network: a fixed resistor (drawn within
//! its tolerance like any other) in series with a trimmer. Its drawn
//! value gives the fixed part's draw; the trimmer's setting is either the
//! one computed for nominal parts (before tuning) or the one the
//! procedure's reading gives on this board, limited to the trimmer's
//! range and rounded to its resolution. A reading that makes a pair of
//! parts resonate where the passive ideal's pair does is, with ideal
//! op-amps, a condition that a product of element values with integer
//! exponents equals a constant (see `realize::tuning`), so the setting
//! follows in closed form.

use crate::circuit::{AcSystem, CircuitError, Netlist};

/// The condition a reading sets: the product of `(element, exponent)`
/// values equals `target` (the trim element among the factors).
#[derive(Debug, Clone, PartialEq)]
pub struct Product {
    /// The factors, each an element index and its exponent.
    pub factors: Vec<(usize, i32)>,
    /// The product's value when the reading is right.
    pub target: f64,
}

/// One trim of a build: its element and how it is bought and set.
#[derive(Debug, Clone, PartialEq)]
pub struct Trimmer {
    /// The trim element's index (fixed resistor plus trimmer in series).
    pub element: usize,
    /// The fixed resistor's nominal value, ohm.
    pub fixed_ohm: f64,
    /// The trimmer's nominal value: the most it adds, ohm.
    pub trimmer_ohm: f64,
    /// Its setting with nominal parts, ohm.
    pub setting_ohm: f64,
    /// The condition the procedure sets it by, or `None` for a trimmer
    /// preset to `setting_ohm` and left there.
    pub reading: Option<Product>,
}

/// How the trimmers of every drawn board are set.
#[derive(Debug, Clone, PartialEq)]
pub struct Tuning {
    /// The trimmers, in the order the procedure sets them.
    pub trimmers: Vec<Trimmer>,
    /// Whether each board is tuned (true) or left at the nominal
    /// settings (false: the yield before tuning).
    pub tuned: bool,
    /// The smallest step of a setting, as a fraction of the trimmer's
    /// value.
    pub resolution: f64,
}

impl Tuning {
    /// Sets every trim element of `system` (holding a drawn board) as
    /// the tuning says, in order.
    pub fn apply(&self, system: &mut AcSystem) -> Result<(), CircuitError> {
        for t in &self.trimmers {
            let ohm = self.setting(t, system.netlist());
            system.set_value(t.element, ohm)?;
        }
        Ok(())
    }

    /// The value trim `t` takes on the board `netlist` holds.
    fn setting(&self, t: &Trimmer, netlist: &Netlist) -> f64 {
        let value = |i: usize| netlist.elements[i].value().unwrap_or(f64::NAN);
        let fixed_ohm = t.fixed_ohm * value(t.element) / (t.fixed_ohm + t.setting_ohm);
        let setting = match (&t.reading, self.tuned) {
            (Some(p), true) => {
                let mut own = 0;
                let mut others = 1.0;
                for &(i, e) in &p.factors {
                    if i == t.element {
                        own += e;
                    } else {
                        others *= value(i).powi(e);
                    }
                }
                let wanted = (p.target / others).powf(1.0 / f64::from(own));
                let step = t.trimmer_ohm * self.resolution;
                // Steps counted from the nominal setting, so a board of
                // nominal parts keeps it exactly.
                let steps = ((wanted - fixed_ohm - t.setting_ohm) / step).round();
                // A trim absent from its own condition (own = 0) has no
                // reading; keep the preset.
                if own != 0 && steps.is_finite() {
                    (t.setting_ohm + steps * step).clamp(0.0, t.trimmer_ohm)
                } else {
                    t.setting_ohm
                }
            }
            _ => t.setting_ohm,
        };
        fixed_ohm + setting
    }
}

//! The entry from the approximation stage: what a [`Prototype`] and the
//! termination ratio give the synthesis.
//!
//! The flat-loss level follows from the ratio (see `terminations`); the
//! reflection zeros are the prototype's roots at that level. Before any
//! element is computed, two facts the normalization of [`crate::approx`]
//! guarantees are checked on the roots: |S11(0)| = |r - 1|/(r + 1) (the
//! terminations), and at the passband edge, where R(1)^2 = 1,
//! |S11(j)|^2 = (level + eps^2)/(1 + eps^2).

use super::darlington::{check_ratio, check_reflection, synthesize_characteristic, Characteristic};
use super::terminations::{
    boundary_ratios, dc_gain, dc_reflection_of, flat_loss_level, LEVEL_TOLERANCE,
};
use super::{Form, Ladder, SynthError};
use crate::approx::{Prototype, Variant};

impl Characteristic {
    /// The characteristic of `proto` between a 1 ohm source and a load of
    /// `load_ratio` ohm: its poles and transmission zeros, and its
    /// reflection roots at the flat-loss level the ratio forces.
    ///
    /// Errors when the ratio is not positive and finite, when the
    /// prototype is a standard even-order elliptic or inverse Chebyshev
    /// (not a ladder), when
    /// the ratio needs more DC transmission than the prototype has
    /// (`InfeasibleRatio`, naming the ratios that work), and when the
    /// roots miss the reflection the normalization promises.
    pub fn from_prototype(
        proto: &Prototype,
        load_ratio: f64,
    ) -> Result<Characteristic, SynthError> {
        check_ratio(load_ratio)?;
        let params = &proto.params;
        if params.family.finite_zeros()
            && params.order.is_multiple_of(2)
            && params.variant == Variant::Standard
        {
            return Err(SynthError::NotALadder {
                family: params.family,
                order: params.order,
            });
        }
        let e0 = dc_reflection_of(params, proto.eps);
        let level = flat_loss_level(load_ratio, e0);
        if level < -LEVEL_TOLERANCE {
            let (lower, upper) = boundary_ratios(e0);
            return Err(SynthError::InfeasibleRatio {
                load_ratio,
                order: params.order,
                variant: params.variant,
                lower,
                upper,
            });
        }
        // Within rounding of a boundary ratio, the boundary itself: the
        // elements depend on the level like its square root there, so
        // rounding noise of 1e-17 would otherwise move them by about 3e-9.
        let level = if level.abs() <= LEVEL_TOLERANCE {
            0.0
        } else {
            level
        };
        let reflection_zeros = proto.reflection_roots(level);
        let eps2 = proto.eps * proto.eps;
        let at_edge = ((level + eps2) / (1.0 + eps2)).sqrt();
        check_reflection(&proto.zpk.poles, &reflection_zeros, 1.0, at_edge)?;
        Ok(Characteristic {
            poles: proto.zpk.poles.clone(),
            reflection_zeros,
            transmission_zeros: proto.transmission_zeros.clone(),
            dc_gain: dc_gain(e0),
        })
    }
}

/// Darlington synthesis of `proto`: the normalized ladder with a 1 ohm
/// source and a load of `load_ratio` ohm, passband edge 1 rad/s, in the
/// requested dual form. Its transfer V(load)/V(source EMF) is
/// `flat_gain * H(s)`.
///
/// Even orders with unequal terminations have a fixed orientation
/// (`MinCapacitor` needs a ratio above 1, `MinInductor` below 1); see
/// [`SynthError::EvenOrderOrientation`]. Use [`crate::synth::variant_for`]
/// to pick the variant a ratio can realize.
pub fn synthesize(proto: &Prototype, load_ratio: f64, form: Form) -> Result<Ladder, SynthError> {
    synthesize_characteristic(
        &Characteristic::from_prototype(proto, load_ratio)?,
        load_ratio,
        form,
    )
}

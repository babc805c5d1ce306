//! Real parts: the IEC 60063 preferred-number series and the tolerance
//! models of the parts bought from them.
//!
//! - [`Series`] (in `series`): E3 to E192 as the published tables, with
//!   snapping of any positive value to the series across decades.
//! - [`Tolerance`] (in `tolerance`): a relative tolerance with a uniform
//!   or truncated-Gaussian spread, drawn from a caller's seeded generator.
//! - [`PartsChoice`] (in `choice`): the series, tolerances and ranges a
//!   build is bought from, and [`ImpedanceLevel`], whether the ladder's
//!   own parts keep the design file's impedance level.
//!
//! Invariants: a [`Series`] value is always one of its table's mantissas
//! times a power of ten; a [`Tolerance`] always lies in
//! [0, [`MAX_TOLERANCE`]] and every factor it draws lies within
//! 1 +- tolerance. This module imports nothing else of nocoil.

mod choice;
mod error;
mod series;
mod tolerance;

pub use choice::{ImpedanceLevel, PartsChoice, DEFAULT_DC_PATH_MAX_OHM};
pub use error::PartsError;
pub use series::Series;
pub use tolerance::{Distribution, Tolerance, MAX_TOLERANCE};

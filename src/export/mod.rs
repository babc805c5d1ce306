//! Outputs: SPICE netlists, the JSON report, engineering notation.

pub mod eng;
pub mod spice;

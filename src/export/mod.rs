//! Outputs: SPICE netlists, the JSON report, engineering notation.

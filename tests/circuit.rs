//! Tests of circuit.

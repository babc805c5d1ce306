//! Tests of synth.

//! Tests of approx.

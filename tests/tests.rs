//! Integration tests: one entry, one module per stage.
mod util;

mod approx;
mod circuit;
mod cli;
mod design;
mod fast;
mod synth;

//! Integration tests: one entry, one module per stage.
mod util;

mod active;
mod approx;
mod circuit;
mod cli;
mod design;
mod synth;

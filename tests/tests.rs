//! Integration tests: one entry, one module per stage.
mod util;

mod active;
mod analysis;
mod approx;
mod circuit;
mod cli;
mod compensation;
mod damping;
mod design;
mod design_for_yield;
mod export;
mod families;
mod fast;
mod fuzz;
mod hardening;
mod layering;
mod level;
mod noise;
mod parts;
mod scipy_cases;
mod snap;
mod step;
mod sweep;
mod synth;
mod tuning;

//! Analyses of a built circuit that speak only the netlist type:
//! sensitivity, Monte Carlo yield and signal levels.
//!
//! - [`sensitivities`] and [`summarize`] (in `sensitivity`): dB per % of
//!   |H| to every R, C, L and op-amp gain-bandwidth, by the adjoint method
//!   (one extra transposed solve per frequency for all of them).
//! - [`monte_carlo`] (in `montecarlo`): yield against a [`Mask`], the
//!   envelope and the worst trials; parallel (rayon) and reproducible for
//!   a seed whatever the thread count.
//! - [`opamp_levels`] (in `levels`): peak gain to every op-amp output and
//!   the largest input before the first one clips.
//! - [`compare`] (in `compare`): a build against the passive ideal
//!   (passband deviation, edge shifts, stopband gains).
//! - [`trace`] (in `sweep`): gain, phase and exact group delay over a
//!   grid through the sparse solver, every value finite.
//! - [`DelayLimit`] (in `spread`): the group-delay spread over bands
//!   against a bound.
//! - [`output_noise`] (in `noise`): the output noise density of every
//!   resistor and op-amp, one adjoint solve per frequency for all.
//! - [`step_figures`] (in `step`): overshoot, rise and settling times of
//!   the step response, from the circuit's modes.
//!
//! Every analysis reads the circuit through [`crate::circuit::AcSystem`]'s
//! public methods only, so any solver behind that interface serves it.
//! Besides `circuit` this module imports only [`crate::parts::Tolerance`]
//! (the tolerance model a Monte Carlo run draws from).

mod compare;
mod error;
mod levels;
mod mask;
mod montecarlo;
mod noise;
mod offset;
mod retune;
mod sensitivity;
mod spread;
mod step;
mod sweep;

pub use compare::{compare, passband_level_db, ComparePoints, Comparison, EDGE_WINDOW};
pub use error::AnalysisError;
pub use levels::{
    input_limits_v, level_traces, opamp_levels, output_currents, OpAmpLevel, LEVEL_POINTS,
};
pub use mask::{Limit, Mask, MaskVerdict, REFINE_BAND_DB, VERDICT_ZOOMS, VERDICT_ZOOM_POINTS};
pub use montecarlo::{
    monte_carlo, wilson_interval, BoardJudge, BoardRoots, Envelope, MonteCarlo, MonteCarloResult,
    Scope, ToleranceRule, TrialSummary, Varied, BLOCK_TRIALS, MEDIAN_BINS, Z95,
};
pub use noise::{
    a_weighting, integrate, noise_band_grid, output_noise, NoiseKind, NoiseSource, NoiseSpectrum,
    MIN_NOISE_POINTS, NOISE_POINTS_PER_DECADE,
};
pub use offset::{bias_offsets, BiasOffsets};
pub use retune::{Product, Trimmer, Tuning};
pub use sensitivity::{
    sensitivities, summarize, Extreme, Parameter, Sensitivity, SensitivitySummary,
    SensitivityTable, SummaryPoints,
};
pub use spread::{judged_from_hz, DelayLimit, DelayVerdict, DC_FRACTION, DELAY_POINTS};
pub use step::{
    step_figures, step_modes, Settling, StepFigures, RESOLVED_BY_ACCURACY, SETTLING_FRACTIONS,
    STEP_SEARCH_SAMPLES,
};
pub use sweep::{trace, unwrap_deg, Trace, Tracer, ZERO_GAIN_DB};

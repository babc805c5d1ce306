//! nocoil: design active filters that keep the low sensitivity of a doubly
//! terminated LC ladder without using a single inductor.
//!
//! The modules follow the workflow, and data flows one way through them:
//!
//! 1. [`spec`]: the design file (TOML) and its validation.
//! 2. [`approx`]: the approximation (Butterworth, Chebyshev, elliptic) and
//!    minimum order, as a normalized lowpass [`approx::Prototype`].
//! 3. [`synth`]: Darlington synthesis of the doubly terminated
//!    [`synth::Ladder`].
//! 4. [`transform`]: lowpass, highpass, bandpass or bandstop, scaled to
//!    frequency and impedance: the passive ideal as a [`circuit::Netlist`].
//! 5. [`active`]: every inductor replaced by op-amp converters (simulated
//!    inductors or the FDNR image), with its stability verdict.
//! 6. [`circuit`]: the netlist type and the nodal-analysis AC solver.
//! 7. [`parts`]: IEC 60063 preferred values and part tolerance models.
//! 8. [`analysis`]: sensitivity (adjoint), Monte Carlo yield and op-amp
//!    signal levels of a netlist.
//! 9. [`export`]: SPICE netlists, JSON report, engineering notation.
//! 10. [`design`]: the pipeline that wires the stages in workflow order.
//!
//! `spec`, `approx`, `circuit` and `parts` import none of the other
//! modules; `circuit` knows nothing of synthesis; `analysis` imports only
//! `circuit` and `parts`.
#![deny(missing_docs)]

pub mod active;
pub mod analysis;
pub mod approx;
pub mod circuit;
pub mod design;
pub mod export;
pub mod parts;
pub mod realize;
pub mod spec;
pub mod synth;
pub mod transform;

//! tapgrid — impact (instrumented-hammer) modal testing of shafts and rotors.
//!
//! The crate is layered; data flows one way:
//!
//! ```text
//! acquire (WAV sets, sessions' raw files)  →  signal (hits, windows, FRFs, verdicts)
//!   →  modal (indicators, fits, shapes)  →  model (shaft beam model)  →  report / cli
//! ```
//!
//! `sim` sits beside the views: it uses the beam model to *produce* WAV sets for tests and demos.
//!
//! # Conventions
//! - All numerics are `f64`. Names carry units: `_hz`, `_s`, `_m`, `_pa`, `_kg`, `_mv_per_unit`.
//! - Engineering units are SI: force in N, acceleration in m/s². A channel's digital sample `d`
//!   (full scale = ±1) becomes volts `v = d · full_scale_volts` and then `v / sensitivity`.
//! - Time dependence `e^{+jωt}`; the forward DFT is `Σ x[n] e^{-j2πkn/N}`. With this convention a
//!   driving-point accelerance has `Im A > 0` at every resonance (Ewins 2000).
//! - Spectra are scaled as continuous Fourier transforms: `X(f_k) = Δt · DFT(x)[k]`, so auto- and
//!   cross-spectra are energy spectra in unit²·s² per hit, averaged over the accepted hits.
//! - FRFs: accelerance in (m/s²)/N; mobility `A/(jω)`; receptance `−A/ω²`; transmissibility is
//!   dimensionless.

pub mod acquire;
pub mod analysis;
pub mod app;
pub mod atomic;
pub mod capture;
pub mod cautions;
pub mod cli;
pub mod clock;
pub mod coast;
pub mod estimate;
pub mod modal;
pub mod model;
pub mod numeric;
pub mod pipeline;
pub mod reduce;
pub mod report;
pub mod rotor;
pub mod session;
pub mod setup;
pub mod signal;
pub mod sim;
pub mod units;

pub use rustfft::num_complex::Complex64;

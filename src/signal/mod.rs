//! The signal chain: hit detection, windows, spectra, FRF estimators and per-hit verdicts.

pub mod calibration;
pub mod carryover;
pub mod coupling;
mod cut;
pub mod frf;
pub mod hits;
pub mod record;
pub mod station;
pub mod taps;
pub mod verdict;
pub mod window;

pub use frf::{CrossSpectra, SpectrumPlan};
pub use record::RecordPlan;
pub use station::{
    HitReport, HitTraces, StationFrf, StationResult, analyze_station, analyze_station_in_test,
    hit_traces,
};
pub use verdict::Reason;

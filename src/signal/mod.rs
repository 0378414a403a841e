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
    HitReport, HitTraces, StationFrf, StationPlans, StationResult, analyze_station,
    analyze_station_in_test, hit_traces,
};
pub use verdict::Reason;

/// The mains frequencies of the world's grids, Hz.
pub const MAINS_HZ: [f64; 2] = [50.0, 60.0];

/// Whether `f_hz` lies within `tol_hz` of a harmonic k·m of one of `mains_hz`, 1 ≤ k ≤
/// `highest`: where a steady line of hum would sit.
pub fn near_mains_harmonic(f_hz: f64, tol_hz: f64, mains_hz: &[f64], highest: u32) -> bool {
    mains_hz.iter().any(|&m| {
        let k = (f_hz / m).round();
        k >= 1.0 && k <= f64::from(highest) && (f_hz - k * m).abs() <= tol_hz
    })
}

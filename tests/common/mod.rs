//! Shared helpers for integration tests: analytic structures and quick records.
#![allow(dead_code)]
#![allow(clippy::unwrap_used, clippy::expect_used)]

use nalgebra::DMatrix;
use tapgrid::Complex64;
use tapgrid::sim::{FrfModel, Impact, Pickup, Rig, Rng, synthesize};

/// A lumped M–C–K system; accelerance by direct inversion, A = −ω²(K − ω²M + jωC)⁻¹ (Ewins 2000).
pub struct MatrixModel {
    pub m: DMatrix<f64>,
    pub c: DMatrix<f64>,
    pub k: DMatrix<f64>,
}

impl MatrixModel {
    /// Receptance matrix at Laplace variable s: (M s² + C s + K)⁻¹.
    pub fn receptance(&self, s: Complex64) -> DMatrix<Complex64> {
        let n = self.m.nrows();
        let z = DMatrix::from_fn(n, n, |i, j| {
            self.m[(i, j)] * s * s + self.c[(i, j)] * s + self.k[(i, j)]
        });
        z.try_inverse().expect("regular dynamic stiffness")
    }

    /// Accelerance of the record after an exponential window e^{−t/τ} on both channels:
    /// by the Laplace shift theorem it is s'²·α(s') with s' = jω + 1/τ.
    pub fn windowed_accelerance(&self, i: usize, j: usize, w: f64, tau: f64) -> Complex64 {
        let s = Complex64::new(if tau.is_finite() { 1.0 / tau } else { 0.0 }, w);
        s * s * self.receptance(s)[(i, j)]
    }
}

impl FrfModel for MatrixModel {
    fn accelerance(&self, i: usize, j: usize, w: f64) -> Complex64 {
        let s = Complex64::new(0.0, w);
        s * s * self.receptance(s)[(i, j)]
    }
    fn slowest_decay_per_s(&self) -> f64 {
        1.0
    }
}

/// A quiet, DC-coupled rig at `fs` with a 2.25 mV/N hammer and a 1.02 mV/(m/s²) accelerometer.
pub fn clean_rig(fs: u32) -> Rig {
    Rig {
        sample_rate_hz: fs,
        ac_corner_hz: None,
        hum_volts: 0.0,
        noise_volts: [1e-6, 1e-6],
        ..Rig::default()
    }
}

/// Impacts every `interval` s from `t0`, all of peak `peak_n` and duration `tc`.
pub fn impacts(count: usize, t0: f64, interval: f64, peak_n: f64, tc: f64) -> Vec<Impact> {
    (0..count)
        .map(|i| Impact {
            time_s: t0 + i as f64 * interval,
            peak_n,
            duration_s: tc,
            second: None,
        })
        .collect()
}

/// A single-mode structure with unit modal mass at its one DOF.
pub fn sdof(f_hz: f64, zeta: f64) -> tapgrid::sim::ModalModel {
    tapgrid::sim::ModalModel {
        modes: vec![tapgrid::sim::TruthMode {
            frequency_hz: f_hz,
            damping_ratio: zeta,
            shape: vec![1.0],
        }],
    }
}

/// Records the driving point of `model` (DOF 0) for the given impacts.
pub fn record(
    model: &dyn FrfModel,
    imp: &[Impact],
    duration: f64,
    rig: &Rig,
    seed: u64,
) -> (Vec<f64>, Vec<f64>) {
    synthesize(
        model,
        Pickup::ForceAndResponse { response: 0 },
        0,
        imp,
        duration,
        rig,
        &mut Rng::new(seed),
    )
}

//! A simulated run-up or coast-down on two channels: a tach pulse train and an accelerometer on a
//! rotor with known modes, for grading the tracking against its truth.
//!
//! Each mode is a Jeffcott rotor m ẍ + c ẋ + k x = m e (Ω² cos θ + Ω̇ sin θ) (rotor-notes §A5,
//! the Ω̇ term included), integrated through the speed ramp by the exact discrete solution of its
//! free response plus a piecewise-linear force (so the sweep bias is real, not modelled); the
//! sensor reads the sum of the modes' accelerations along x. Tach: a pulse of a given width per
//! revolution (or several), both channels through a first-order AC coupling, with noise, mains
//! hum, edge jitter and optional missing pulses; a subsynchronous component can be switched on
//! above a speed.

use serde::{Deserialize, Serialize};

use crate::acquire::InputError;
use crate::acquire::wav::{SampleEncoding, write_channels};

/// One mode of the simulated rotor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RunMode {
    /// Undamped natural frequency, Hz.
    pub frequency_hz: f64,
    /// Damping ratio.
    pub damping_ratio: f64,
    /// Unbalance eccentricity e = U/m, m.
    pub eccentricity_m: f64,
}

/// A subsynchronous component (whirl) in the vibration.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Whirl {
    /// Order (fraction of running speed).
    pub order: f64,
    /// Amplitude, m/s² (0-peak).
    pub amplitude_m_s2: f64,
    /// Present above this speed, rpm.
    pub above_rpm: f64,
}

/// A simulated run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct RunScenario {
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Speed at the start, rpm.
    pub start_rpm: f64,
    /// Speed at the end, rpm (below the start: a coast-down).
    pub end_rpm: f64,
    /// Duration, s (the speed changes linearly).
    pub duration_s: f64,
    /// Modes.
    pub modes: Vec<RunMode>,
    /// Tach pulses per revolution.
    pub pulses_per_rev: usize,
    /// Tach pulse width, s.
    pub pulse_width_s: f64,
    /// Tach pulse height, fraction of full scale (negative: inverted pulses).
    pub pulse_height: f64,
    /// Edge jitter (standard deviation), s.
    pub jitter_s: f64,
    /// Revolutions whose pulse is missing.
    pub missing_pulses: Vec<usize>,
    /// AC-coupling corner of both inputs, Hz (0: DC-coupled).
    pub ac_corner_hz: f64,
    /// Accelerometer noise, m/s² RMS.
    pub noise_m_s2: f64,
    /// Mains hum on the vibration channel, Hz and m/s² (0-peak).
    pub hum: (f64, f64),
    /// Full scale of the vibration channel, m/s² at digital ±1.
    pub full_scale_m_s2: f64,
    /// A subsynchronous component.
    pub whirl: Option<Whirl>,
    /// Random seed.
    pub seed: u64,
}

impl Default for RunScenario {
    /// A coast-down from 6000 to 300 rpm in 120 s through a mode at 50.33 Hz with ζ = 0.02 and
    /// e = 10 µm (the Jeffcott rotor of rotor-notes §D1), 48 kHz.
    fn default() -> Self {
        Self {
            sample_rate_hz: 48_000,
            start_rpm: 6000.0,
            end_rpm: 300.0,
            duration_s: 120.0,
            modes: vec![RunMode {
                frequency_hz: 50.329_2,
                damping_ratio: 0.02,
                eccentricity_m: 10e-6,
            }],
            pulses_per_rev: 1,
            pulse_width_s: 0.0005,
            pulse_height: 0.6,
            jitter_s: 2e-6,
            missing_pulses: Vec::new(),
            ac_corner_hz: 2.0,
            noise_m_s2: 0.02,
            hum: (50.0, 0.05),
            full_scale_m_s2: 100.0,
            whirl: None,
            seed: 1,
        }
    }
}

/// What the simulated run should give.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RunTruth {
    /// Each mode's steady-state peak of the acceleration response to unbalance, rpm.
    pub critical_speeds_rpm: Vec<f64>,
    /// Each mode's 1/(2ζ).
    pub amplification_factors: Vec<f64>,
    /// The whirl's order and onset, when there is one.
    pub whirl: Option<Whirl>,
    /// The scenario.
    pub scenario: RunScenario,
}

fn gauss(state: &mut u64) -> f64 {
    let mut u = || {
        *state ^= *state << 13;
        *state ^= *state >> 7;
        *state ^= *state << 17;
        ((*state >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    };
    let (a, b) = (u(), u());
    (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
}

impl RunScenario {
    /// Checks the numbers; the message names the bad one.
    pub fn validate(&self) -> Result<(), String> {
        let pos = |name: &str, v: f64| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(format!("{name} must be positive"))
            }
        };
        pos("start_rpm", self.start_rpm)?;
        pos("end_rpm", self.end_rpm)?;
        pos("duration_s", self.duration_s)?;
        pos("full_scale_m_s2", self.full_scale_m_s2)?;
        if self.duration_s * f64::from(self.sample_rate_hz) > 2e8 {
            return Err("the run is too long to simulate (over 2e8 samples)".into());
        }
        if !(8000..=384_000).contains(&self.sample_rate_hz) {
            return Err("sample_rate_hz must be 8000 to 384000".into());
        }
        for m in &self.modes {
            pos("a mode's frequency_hz", m.frequency_hz)?;
            pos("a mode's damping_ratio", m.damping_ratio)?;
        }
        Ok(())
    }

    /// The two channels (tach, vibration) in full-scale units, and the truth.
    pub fn render(&self) -> Result<(Vec<f64>, Vec<f64>, RunTruth), String> {
        self.validate()?;
        let fs = f64::from(self.sample_rate_hz);
        let n = (self.duration_s * fs) as usize;
        let dt = 1.0 / fs;
        let w0 = self.start_rpm * std::f64::consts::PI / 30.0;
        let w1 = self.end_rpm * std::f64::consts::PI / 30.0;
        let alpha = (w1 - w0) / self.duration_s; // Ω̇, rad/s²
        let mut state = self.seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1;
        // Vibration: each mode integrated exactly over a sample with the force linear in between.
        let mut accel = vec![0.0; n];
        for m in &self.modes {
            let wn = std::f64::consts::TAU * m.frequency_hz;
            let z = m.damping_ratio;
            // State-space x' = A x + B f, f = e(Ω² cos θ + Ω̇ sin θ) per unit mass; discretised
            // by the matrix exponential with a first-order hold (nalgebra).
            let a = nalgebra::Matrix2::new(0.0, 1.0, -wn * wn, -2.0 * z * wn);
            let big = nalgebra::Matrix4::from_fn(|i, j| match (i, j) {
                (0..=1, 0..=1) => a[(i, j)] * dt,
                (1, 2) => dt,
                (2, 3) => 1.0,
                _ => 0.0,
            });
            let e = big.exp();
            // x_{k+1} = Φ x_k + Γ0 f_k + Γ1 (f_{k+1} − f_k) with Γ0 = e[0..2, 2], Γ1 = e[0..2, 3].
            let phi = nalgebra::Matrix2::new(e[(0, 0)], e[(0, 1)], e[(1, 0)], e[(1, 1)]);
            let g0 = nalgebra::Vector2::new(e[(0, 2)], e[(1, 2)]);
            let g1 = nalgebra::Vector2::new(e[(0, 3)], e[(1, 3)]);
            let force = |k: usize| {
                let t = k as f64 * dt;
                let w = w0 + alpha * t;
                let th = w0 * t + 0.5 * alpha * t * t;
                m.eccentricity_m * (w * w * th.cos() + alpha * th.sin())
            };
            // Start from the steady response at the first speed (no start-up transient).
            let h = |w: f64| {
                crate::Complex64::new(1.0, 0.0)
                    / crate::Complex64::new(wn * wn - w * w, 2.0 * z * wn * w)
            };
            let x0 = h(w0) * m.eccentricity_m * w0 * w0;
            let mut x = nalgebra::Vector2::new(x0.re, (crate::Complex64::new(0.0, w0) * x0).re);
            let mut f_prev = force(0);
            for (k, out) in accel.iter_mut().enumerate() {
                let f = f_prev;
                *out += -wn * wn * x[0] - 2.0 * z * wn * x[1] + f;
                let f_next = force(k + 1);
                x = phi * x + g0 * f + g1 * (f_next - f);
                f_prev = f_next;
            }
        }
        // Tach pulses at θ = 2πj/p (with jitter), a missing one now and then; whirl above a speed.
        let ppr = self.pulses_per_rev.max(1);
        let mut tach = vec![0.0; n];
        let theta_end = w0 * self.duration_s + 0.5 * alpha * self.duration_s.powi(2);
        let pulses = (theta_end / std::f64::consts::TAU * ppr as f64).floor() as usize;
        let width = (self.pulse_width_s * fs).max(1.0);
        for j in 0..=pulses {
            if self.missing_pulses.contains(&(j / ppr)) && j % ppr == 0 {
                continue;
            }
            let th = std::f64::consts::TAU * j as f64 / ppr as f64;
            // Time of angle θ: w0 t + α t²/2 = θ.
            let t = if alpha.abs() < 1e-12 {
                th / w0
            } else {
                let disc = w0 * w0 + 2.0 * alpha * th;
                if disc < 0.0 {
                    break;
                }
                (-w0 + disc.sqrt()) / alpha
            } + self.jitter_s * gauss(&mut state);
            let start = t * fs;
            let i0 = start.floor().max(0.0) as usize;
            let i1 = ((start + width).ceil() as usize).min(n);
            for (i, v) in tach.iter_mut().enumerate().take(i1).skip(i0) {
                // Area-weighted coverage of each sample by the pulse (sub-sample edges).
                let a = (i as f64).max(start);
                let b = ((i + 1) as f64).min(start + width);
                if b > a {
                    *v += self.pulse_height * (b - a);
                }
            }
        }
        let mut vib = vec![0.0; n];
        for (k, v) in vib.iter_mut().enumerate() {
            let t = k as f64 * dt;
            let w = w0 + alpha * t;
            let th = w0 * t + 0.5 * alpha * t * t;
            let mut a = accel[k] + self.noise_m_s2 * gauss(&mut state);
            a += self.hum.1 * (std::f64::consts::TAU * self.hum.0 * t).sin();
            if let Some(wh) = &self.whirl
                && w * 30.0 / std::f64::consts::PI >= wh.above_rpm
            {
                a += wh.amplitude_m_s2 * (wh.order * th + 0.7).cos();
            }
            *v = a / self.full_scale_m_s2;
        }
        if self.ac_corner_hz > 0.0 {
            // First-order high-pass by the bilinear transform.
            let k = (std::f64::consts::PI * self.ac_corner_hz / fs).tan();
            let (b0, a1) = (1.0 / (1.0 + k), (1.0 - k) / (1.0 + k));
            for ch in [&mut tach, &mut vib] {
                let (mut xp, mut yp) = (0.0, 0.0);
                for v in ch.iter_mut() {
                    let y = b0 * (*v - xp) + a1 * yp;
                    xp = *v;
                    yp = y;
                    *v = y;
                }
            }
        }
        for v in tach.iter_mut() {
            *v += 1e-4 * gauss(&mut state);
        }
        // Truth: peak of the steady acceleration response a = e Ω⁴/√((ωn²−Ω²)² + (2ζωnΩ)²).
        let crit = self
            .modes
            .iter()
            .map(|m| {
                let z = m.damping_ratio;
                // d/dr of r⁴/√((1−r²)²+(2ζr)²) = 0 → r² = 1/(1 − 2ζ²) for displacement; for
                // acceleration: r² = 1/(1 − 2ζ²)·... solved numerically.
                let f = |r: f64| r.powi(4) / ((1.0 - r * r).powi(2) + (2.0 * z * r).powi(2)).sqrt();
                let (mut lo, mut hi) = (0.9, 1.2);
                for _ in 0..200 {
                    let a = lo + (hi - lo) / 3.0;
                    let b = hi - (hi - lo) / 3.0;
                    if f(a) < f(b) {
                        lo = a;
                    } else {
                        hi = b;
                    }
                }
                0.5 * (lo + hi) * m.frequency_hz * 60.0
            })
            .collect();
        let truth = RunTruth {
            critical_speeds_rpm: crit,
            amplification_factors: self.modes.iter().map(|m| 0.5 / m.damping_ratio).collect(),
            whirl: self.whirl,
            scenario: self.clone(),
        };
        Ok((tach, vib, truth))
    }

    /// Writes `run.wav` (channel 0 tach, 1 vibration; float32) and `truth.json` into `dir`.
    pub fn write(&self, dir: &std::path::Path) -> Result<RunTruth, InputError> {
        let (tach, vib, truth) = self.render().map_err(|e| InputError::new(dir, e))?;
        std::fs::create_dir_all(dir)
            .map_err(|e| InputError::new(dir, format!("cannot create: {e}")))?;
        write_channels(
            &dir.join("run.wav"),
            self.sample_rate_hz,
            SampleEncoding::Float32,
            &[&tach, &vib],
        )?;
        let text = serde_json::to_string_pretty(&truth)
            .map_err(|e| InputError::new(dir, format!("cannot write the truth: {e}")))?;
        crate::atomic::write_bytes(&dir.join("truth.json"), text.as_bytes())
            .map_err(|e| InputError::new(dir, format!("cannot write truth.json: {e}")))?;
        Ok(truth)
    }
}

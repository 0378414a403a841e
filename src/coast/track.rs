//! Order tracking: the synchronous DFT of the vibration over each revolution (rotor-notes §C3),
//! AC-coupling correction and integration per order, and the angle-domain order spectra of blocks
//! of revolutions (§C4).

use serde::Serialize;

use crate::Complex64;

/// What the amplitude is expressed as.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Quantity {
    /// As recorded (acceleration for an accelerometer), m/s².
    #[default]
    Acceleration,
    /// Integrated once, m/s.
    Velocity,
    /// Integrated twice, m.
    Displacement,
}

impl Quantity {
    /// SI unit.
    pub fn unit(self) -> &'static str {
        match self {
            Quantity::Acceleration => "m/s²",
            Quantity::Velocity => "m/s",
            Quantity::Displacement => "m",
        }
    }
}

/// One order over one revolution.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrderPoint {
    /// Mid-revolution time, s.
    pub time_s: f64,
    /// Speed over the revolution, rpm.
    pub speed_rpm: f64,
    /// The order vector: amplitude (0-peak, SI units of the quantity) and phase, with
    /// x(t) = A cos(nΘ(t) − φ) and the vector A e^{−iφ} (φ the lag behind the tach edge).
    pub vector: Complex64,
}

/// Tracks `orders` of `x` (SI units of acceleration, sampled at `fs`) over each revolution in
/// `starts_s`. `ac_corner_hz`: the input's first-order high-pass corner to undo (0: none).
pub fn track(
    x: &[f64],
    fs: f64,
    starts_s: &[f64],
    orders: &[u32],
    quantity: Quantity,
    ac_corner_hz: f64,
) -> Vec<Vec<OrderPoint>> {
    let mut out = vec![Vec::with_capacity(starts_s.len()); orders.len()];
    for w in starts_s.windows(2) {
        let (t0, t1) = (w[0], w[1]);
        let period = t1 - t0;
        if period.is_nan() || period <= 0.0 {
            continue;
        }
        let i0 = (t0 * fs).ceil().max(0.0) as usize;
        let i1 = ((t1 * fs).ceil() as usize).min(x.len());
        if i1 <= i0 + 2 {
            continue;
        }
        let omega = std::f64::consts::TAU / period;
        for (o, &n) in orders.iter().enumerate() {
            let n = f64::from(n);
            // e^{−inφ} by recurrence across the samples of the revolution.
            let step = Complex64::from_polar(1.0, -n * omega / fs);
            let mut rot = Complex64::from_polar(1.0, -n * omega * (i0 as f64 / fs - t0));
            let mut sum = Complex64::new(0.0, 0.0);
            for &v in &x[i0..i1] {
                sum += rot * v;
                rot *= step;
            }
            let mut vector = sum * (2.0 / (fs * period));
            let w_n = n * omega;
            if ac_corner_hz > 0.0 {
                // H(jω) = jω/(jω + ω_c): divide it out.
                let jw = Complex64::new(0.0, w_n);
                vector /= jw / (jw + std::f64::consts::TAU * ac_corner_hz);
            }
            vector = match quantity {
                Quantity::Acceleration => vector,
                Quantity::Velocity => vector / Complex64::new(0.0, w_n),
                Quantity::Displacement => vector / Complex64::new(-w_n * w_n, 0.0),
            };
            out[o].push(OrderPoint {
                time_s: 0.5 * (t0 + t1),
                speed_rpm: 60.0 / period,
                vector,
            });
        }
    }
    out
}

/// Phase lag of a vector, degrees (0–360).
pub fn lag_deg(v: Complex64) -> f64 {
    (-v.arg().to_degrees()).rem_euclid(360.0)
}

/// Lags of a sequence, unwrapped (no jump over 180° between neighbours).
pub fn unwrapped_lags(v: &[Complex64]) -> Vec<f64> {
    unwrap_deg(v.iter().map(|&z| lag_deg(z)))
}

/// Angles in degrees, unwrapped: each moved by whole turns to within 180° of the one before.
pub fn unwrap_deg(angles: impl IntoIterator<Item = f64>) -> Vec<f64> {
    let mut out: Vec<f64> = Vec::new();
    for mut l in angles {
        if let Some(&p) = out.last() {
            while l - p > 180.0 {
                l -= 360.0;
            }
            while l - p < -180.0 {
                l += 360.0;
            }
        }
        out.push(l);
    }
    out
}

/// An order spectrum of a block of revolutions.
#[derive(Debug, Clone, PartialEq)]
pub struct OrderSpectrum {
    /// Mean speed of the block, rpm.
    pub speed_rpm: f64,
    /// Order of each line (resolution 1/revolutions).
    pub orders: Vec<f64>,
    /// Amplitude (0-peak, recorded units) of each line, Hann window.
    pub amplitude: Vec<f64>,
}

/// Samples per revolution of the angle-domain resampling.
pub const SAMPLES_PER_REV: usize = 64;

/// Order spectra of consecutive blocks of `revs_per_block` revolutions: the signal averaged into
/// 64 equal angle bins per revolution (a boxcar anti-alias filter), then a Hann-windowed FFT.
pub fn order_spectra(
    x: &[f64],
    fs: f64,
    starts_s: &[f64],
    revs_per_block: usize,
) -> Vec<OrderSpectrum> {
    let s = SAMPLES_PER_REV;
    let m = revs_per_block.max(2);
    let n = m * s;
    let mut planner = rustfft::FftPlanner::<f64>::new();
    let fft = planner.plan_fft_forward(n);
    let hann: Vec<f64> = (0..n)
        .map(|k| 0.5 - 0.5 * (std::f64::consts::TAU * k as f64 / n as f64).cos())
        .collect();
    let wsum: f64 = hann.iter().sum();
    let mut out = Vec::new();
    let revs = starts_s.len().saturating_sub(1);
    let mut b = 0;
    while (b + 1) * m <= revs {
        let mut buf: Vec<Complex64> = Vec::with_capacity(n);
        let mut speed = 0.0;
        for r in b * m..(b + 1) * m {
            let (t0, t1) = (starts_s[r], starts_s[r + 1]);
            speed += 60.0 / (t1 - t0);
            for k in 0..s {
                let a = t0 + (t1 - t0) * k as f64 / s as f64;
                let e = t0 + (t1 - t0) * (k + 1) as f64 / s as f64;
                let (i0, i1) = (
                    ((a * fs).ceil() as usize).min(x.len()),
                    ((e * fs).ceil() as usize).min(x.len()),
                );
                let v = if i1 > i0 {
                    x[i0..i1].iter().sum::<f64>() / (i1 - i0) as f64
                } else {
                    // Fewer samples than bins (a very fast shaft): the nearest sample.
                    x[((0.5 * (a + e) * fs).round() as usize).min(x.len() - 1)]
                };
                buf.push(Complex64::new(v, 0.0));
            }
        }
        for (z, w) in buf.iter_mut().zip(&hann) {
            *z *= *w;
        }
        fft.process(&mut buf);
        let lines = n / 2;
        out.push(OrderSpectrum {
            speed_rpm: speed / m as f64,
            orders: (0..lines).map(|j| j as f64 / m as f64).collect(),
            amplitude: buf[..lines].iter().map(|z| 2.0 * z.norm() / wsum).collect(),
        });
        b += 1;
    }
    out
}

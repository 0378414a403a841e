//! A synthetic two-channel source: hammer pulses at a fixed interval and the damped ringing of a
//! few modes, at any rate, paced or as fast as the consumer reads. For benchmarks and tests of
//! the capture engine without a device.

use std::time::Duration;

use crate::Complex64;
use crate::acquire::source::{Health, Source, SourceError};

/// How many frames the next read gives (`Ended` after the last), after waiting, when paced,
/// until the first of them is due.
fn next_chunk(
    produced: u64,
    total: u64,
    chunk: usize,
    rate: u32,
    paced: Option<std::time::Instant>,
) -> Result<u64, SourceError> {
    if produced >= total {
        return Err(SourceError::Ended);
    }
    if let Some(t0) = paced {
        let due = t0 + Duration::from_secs_f64(produced as f64 / f64::from(rate));
        if let Some(d) = due.checked_duration_since(std::time::Instant::now()) {
            std::thread::sleep(d);
        }
    }
    Ok((chunk as u64).min(total - produced))
}

/// The generator.
pub struct Generator {
    rate: u32,
    interval_s: f64,
    total: u64,
    produced: u64,
    chunk: usize,
    /// Modes: (frequency Hz, damping ratio, amplitude fraction of full scale per unit force).
    modes: Vec<(f64, f64, f64)>,
    pulse_s: f64,
    force_fs: f64,
    noise: u64,
    paced: Option<std::time::Instant>,
}

impl Generator {
    /// Hits every `interval_s` (the first at half an interval) for `duration_s`, in chunks of
    /// `chunk` frames; `paced` delivers them at the sample rate.
    pub fn new(rate: u32, interval_s: f64, duration_s: f64, chunk: usize, paced: bool) -> Self {
        Self {
            rate,
            interval_s,
            total: (duration_s * rate as f64) as u64,
            produced: 0,
            chunk,
            modes: vec![
                (291.0, 0.004, 0.3),
                (717.0, 0.004, 0.2),
                (1268.0, 0.004, 0.1),
            ],
            pulse_s: 2.5e-4,
            force_fs: 0.4,
            noise: 0x9e37_79b9_7f4a_7c15,
            paced: paced.then(std::time::Instant::now),
        }
    }

    /// Frames generated so far.
    pub fn produced(&self) -> u64 {
        self.produced
    }

    fn sample(&mut self, i: u64) -> [f32; 2] {
        let t = i as f64 / self.rate as f64;
        let k = ((t - 0.5 * self.interval_s) / self.interval_s).floor();
        let t0 = 0.5 * self.interval_s + k.max(0.0) * self.interval_s;
        let tau = t - t0;
        let mut a = 0.0;
        let mut b = 0.0;
        if tau >= 0.0 {
            if tau < self.pulse_s {
                a = self.force_fs * (std::f64::consts::PI * tau / self.pulse_s).sin();
            }
            for &(f, z, amp) in &self.modes {
                let w = 2.0 * std::f64::consts::PI * f;
                b += amp * (-z * w * tau).exp() * (w * tau).sin();
            }
        }
        // xorshift noise at about −90 dB of full scale
        self.noise ^= self.noise << 13;
        self.noise ^= self.noise >> 7;
        self.noise ^= self.noise << 17;
        let n = ((self.noise >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 6e-5;
        [(a + n) as f32, (b - n) as f32]
    }
}

impl Source for Generator {
    fn sample_rate_hz(&self) -> u32 {
        self.rate
    }

    fn read(&mut self, out: &mut Vec<[f32; 2]>, _wait: Duration) -> Result<(), SourceError> {
        let n = next_chunk(self.produced, self.total, self.chunk, self.rate, self.paced)?;
        for i in 0..n {
            let s = self.sample(self.produced + i);
            out.push(s);
        }
        self.produced += n;
        Ok(())
    }

    fn health(&self) -> Health {
        Health::default()
    }
}

/// A synthetic coast-down for recording runs without a machine: a once-per-revolution tach on
/// channel 0 and the quasi-steady 1× acceleration of a Jeffcott rotor (critical speed 1800 rpm,
/// ζ = 0.04) on channel 1. The speed falls as dN/dt = −c(N + N_f) (windage plus friction) from
/// 3600 rpm to rest in about 64 s; then the generator gives a few seconds of standstill and ends.
pub struct RunGenerator {
    rate: u32,
    produced: u64,
    total: u64,
    chunk: usize,
    paced: Option<std::time::Instant>,
    noise: u64,
}

impl RunGenerator {
    /// Start speed, rpm.
    pub const TOP_RPM: f64 = 3600.0;
    /// Critical speed, rpm.
    pub const CRITICAL_RPM: f64 = 1800.0;
    /// Damping ratio.
    pub const ZETA: f64 = 0.04;
    const C: f64 = 0.04;
    const NF: f64 = 300.0;

    /// A coast-down at `rate` Hz in chunks of `chunk` frames; `paced` delivers it in real time.
    pub fn new(rate: u32, chunk: usize, paced: bool) -> Self {
        let stop = Self::stop_s();
        Self {
            rate,
            produced: 0,
            total: ((stop + 4.0) * f64::from(rate)) as u64,
            chunk,
            paced: paced.then(std::time::Instant::now),
            noise: 0x2545_f491_4f6c_dd1d,
        }
    }

    /// When the rotor stops, s.
    pub fn stop_s() -> f64 {
        ((Self::TOP_RPM + Self::NF) / Self::NF).ln() / Self::C
    }

    /// Speed at `t`, rpm.
    pub fn speed_rpm(t: f64) -> f64 {
        ((Self::TOP_RPM + Self::NF) * (-Self::C * t).exp() - Self::NF).max(0.0)
    }

    /// Revolutions turned by `t`.
    fn revs(t: f64) -> f64 {
        let t = t.min(Self::stop_s());
        ((Self::TOP_RPM + Self::NF) / Self::C * (1.0 - (-Self::C * t).exp()) - Self::NF * t) / 60.0
    }

    fn sample(&mut self, i: u64) -> [f32; 2] {
        let t = i as f64 / f64::from(self.rate);
        let n = Self::speed_rpm(t);
        let revs = Self::revs(t);
        let mut tach = 0.0;
        let mut acc = 0.0;
        if n > 0.0 {
            let since = revs.fract() / (n / 60.0);
            if since < 1e-3 {
                tach = 0.8;
            }
            let r = n / Self::CRITICAL_RPM;
            let d = Complex64::new(1.0 - r * r, 2.0 * Self::ZETA * r);
            let resp = Complex64::new(0.05 * r.powi(4), 0.0) / d;
            let th = 2.0 * std::f64::consts::PI * revs;
            acc = (resp * Complex64::from_polar(1.0, th)).re;
        }
        self.noise ^= self.noise << 13;
        self.noise ^= self.noise >> 7;
        self.noise ^= self.noise << 17;
        let e = ((self.noise >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 2e-3;
        [(tach + 0.1 * e) as f32, (acc + e) as f32]
    }
}

impl Source for RunGenerator {
    fn sample_rate_hz(&self) -> u32 {
        self.rate
    }

    fn read(&mut self, out: &mut Vec<[f32; 2]>, _wait: Duration) -> Result<(), SourceError> {
        let n = next_chunk(self.produced, self.total, self.chunk, self.rate, self.paced)?;
        for i in 0..n {
            let s = self.sample(self.produced + i);
            out.push(s);
        }
        self.produced += n;
        Ok(())
    }

    fn health(&self) -> Health {
        Health::default()
    }
}

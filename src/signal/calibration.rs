//! Calibration helpers (Brown, Allemang & Phillips 2015; common practice): a channel's sensitivity or volts at full scale from a
//! known tone, the mass check (accelerance of a free rigid mass is 1/m) and the loopback check
//! (one signal into both inputs: H = 1).

use std::collections::BTreeMap;

use super::frf::CrossSpectra;
use super::{SpectrumPlan, analyze_station};
use crate::setup::Setup;

/// A tone found in a recording.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tone {
    /// Its frequency, Hz (refined around the expected one).
    pub frequency_hz: f64,
    /// Its rms, full-scale units.
    pub rms_fs: f64,
    /// Share of the signal's variance in the tone (1 = a pure sine).
    pub purity: f64,
}

/// Least-squares fit of a sine near `f_hz` (searched ±2 % on a fine grid, then refined) to the
/// mean-removed signal: rms = amplitude/√2.
pub fn tone(x: &[f64], fs: u32, f_hz: f64) -> Result<Tone, String> {
    if x.len() < (fs as usize / 10).max(64) {
        return Err("the recording is shorter than 0.1 s".into());
    }
    if f_hz.is_nan() || f_hz <= 0.0 || f_hz >= 0.5 * fs as f64 {
        return Err(format!(
            "{f_hz} Hz is not between 0 and half the sample rate"
        ));
    }
    let mean = x.iter().sum::<f64>() / x.len() as f64;
    let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / x.len() as f64;
    if var <= 0.0 {
        return Err("the channel is silent".into());
    }
    let fit = |f: f64| {
        // Projection on cos and sin (accurate when the record holds many periods).
        let w = 2.0 * std::f64::consts::PI * f / fs as f64;
        let (mut c, mut s, mut cc, mut ss, mut cs) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for (i, v) in x.iter().enumerate() {
            let (si, co) = (w * i as f64).sin_cos();
            let d = v - mean;
            c += d * co;
            s += d * si;
            cc += co * co;
            ss += si * si;
            cs += co * si;
        }
        let det = cc * ss - cs * cs;
        let a = (c * ss - s * cs) / det;
        let b = (s * cc - c * cs) / det;
        (a * a + b * b).sqrt()
    };
    let mut best = (f_hz, fit(f_hz));
    let mut step = 0.02 * f_hz / 20.0;
    for _ in 0..4 {
        let centre = best.0;
        for k in -20..=20 {
            let f = centre + k as f64 * step;
            if f > 0.0 {
                let a = fit(f);
                if a > best.1 {
                    best = (f, a);
                }
            }
        }
        step /= 10.0;
    }
    let rms = best.1 / 2f64.sqrt();
    Ok(Tone {
        frequency_hz: best.0,
        rms_fs: rms,
        purity: (rms * rms / var).min(1.0),
    })
}

/// Result of the mass check.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MassCheck {
    /// Median over the band of |H|·m (1 = the chain is calibrated).
    pub ratio: f64,
    /// Half the 10–90 % range of |H|·m over the band, relative to the median.
    pub spread: f64,
    /// Band used, Hz.
    pub band_hz: [f64; 2],
    /// Hits averaged.
    pub hits: usize,
}

/// Taps on a freely suspended rigid mass `mass_kg` (hammer layout): the accelerance should be
/// flat at 1/m (Brown et al. 2015). Lines with coherence below 0.95 are left out.
pub fn mass_check(
    a: &[f64],
    b: &[f64],
    fs: u32,
    setup: &Setup,
    mass_kg: f64,
) -> Result<MassCheck, String> {
    if mass_kg.is_nan() || mass_kg <= 0.0 {
        return Err("the mass must be positive".into());
    }
    let mut plan: Option<SpectrumPlan> = None;
    let r = analyze_station(a, b, fs, setup, &BTreeMap::new(), &mut plan)?;
    let frf = r.frf.ok_or("no accepted hit in the recording")?;
    let mut v: Vec<f64> = frf
        .h
        .iter()
        .zip(&frf.coherence)
        .filter(|(_, g)| **g >= 0.95)
        .map(|(h, _)| h.norm() * mass_kg)
        .collect();
    if v.len() < 8 {
        return Err("too few coherent lines (γ² ≥ 0.95) in the band".into());
    }
    v.sort_by(f64::total_cmp);
    let q = |p: f64| v[((v.len() - 1) as f64 * p).round() as usize];
    let med = q(0.5);
    Ok(MassCheck {
        ratio: med,
        spread: (q(0.9) - q(0.1)) / 2.0 / med,
        band_hz: [frf.freq_hz[0], *frf.freq_hz.last().unwrap_or(&0.0)],
        hits: frf.hits_averaged,
    })
}

/// Result of the loopback check.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Loopback {
    /// Median |H| over lines with signal.
    pub gain: f64,
    /// |H| farthest from 1.
    pub worst_gain: f64,
    /// Largest |phase|, degrees (after polarity).
    pub worst_phase_deg: f64,
    /// B is A inverted.
    pub inverted: bool,
}

/// One signal into both inputs: H = G_ab/G_aa over 8192-sample Hann segments (50 % overlap),
/// on the lines holding 99 % of channel A's power.
pub fn loopback(a: &[f64], b: &[f64], fs: u32) -> Result<Loopback, String> {
    let n = 8192usize;
    if a.len() < 2 * n {
        return Err(format!("the recording is shorter than {} samples", 2 * n));
    }
    let dt = 1.0 / fs as f64;
    let mut plan = SpectrumPlan::new(n);
    let hann: Vec<f64> = (0..n)
        .map(|i| 0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / n as f64).cos())
        .collect();
    let mut sums = CrossSpectra::new(n / 2);
    let mut start = 0;
    while start + n <= a.len().min(b.len()) {
        let wa: Vec<f64> = (0..n).map(|i| a[start + i] * hann[i]).collect();
        let wb: Vec<f64> = (0..n).map(|i| b[start + i] * hann[i]).collect();
        let sa = plan.lines(&wa, dt, 1..n / 2 + 1);
        let sb = plan.lines(&wb, dt, 1..n / 2 + 1);
        sums.add(&sa, &sb);
        start += n / 2;
    }
    let (gaa, _, gab) = sums.averaged();
    let total: f64 = gaa.iter().sum();
    if total <= 0.0 {
        return Err("channel A is silent".into());
    }
    let mut order: Vec<usize> = (0..gaa.len()).collect();
    order.sort_by(|&i, &j| gaa[j].total_cmp(&gaa[i]));
    let mut acc = 0.0;
    let mut lines = Vec::new();
    for i in order {
        lines.push(i);
        acc += gaa[i];
        if acc >= 0.99 * total {
            break;
        }
    }
    let h: Vec<_> = lines.iter().map(|&k| gab[k] / gaa[k]).collect();
    let re_sum: f64 = h.iter().map(|c| c.re).sum();
    let inverted = re_sum < 0.0;
    let sign = if inverted { -1.0 } else { 1.0 };
    let mut gains: Vec<f64> = h.iter().map(|c| c.norm()).collect();
    gains.sort_by(f64::total_cmp);
    let gain = gains[gains.len() / 2];
    let worst_gain = gains
        .iter()
        .copied()
        .max_by(|x, y| (x - 1.0).abs().total_cmp(&(y - 1.0).abs()))
        .unwrap_or(gain);
    let worst_phase_deg = h
        .iter()
        .map(|c| (c * sign).arg().to_degrees().abs())
        .fold(0.0, f64::max);
    Ok(Loopback {
        gain,
        worst_gain,
        worst_phase_deg,
        inverted,
    })
}

//! Ringing carried over from earlier hits.
//!
//! A lightly damped part still rings when the next tap lands; that free decay is in the next
//! record, uncorrelated with its force, and biases the FRF (most of all the damping of the modes
//! that ring longest). Between two taps the response is a pure free decay, often a second long:
//! its spectra give the ringing poles accurately (LSCF over the free-decay segments of the station,
//! the same estimator as the modal stage); the decay is then fitted just before each tap and its
//! continuation subtracted from that tap's record.

use nalgebra::{DMatrix, DVector};

use super::frf::SpectrumPlan;
use super::window::{apply_exponential, exponential_tau_s};
use crate::Complex64;
use crate::estimate::lscf::{PoleStatus, StabilityCriteria, stabilization_from};

/// Where a hit's pulse lies in the recording (sample indices).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PulseSpan {
    /// Trigger sample.
    pub trigger: usize,
    /// First sample of the pulse.
    pub start: usize,
    /// First sample after the pulse.
    pub end: usize,
}

/// Carried-over ringing smaller than this fraction of a record's own peak is left alone (its bias
/// on the FRF is then well under 1 %).
pub const RINGING_THRESHOLD: f64 = 0.003;

/// For each hit, the carried-over ringing of channel `x` over its record `[trigger − pre,
/// trigger − pre + n)`, to subtract; `None` where there is none worth removing or it cannot be
/// modelled. `band_hz` bounds the poles looked for.
pub fn corrections(
    x: &[f64],
    fs: u32,
    hits: &[PulseSpan],
    pre: usize,
    n: usize,
    band_hz: [f64; 2],
) -> Vec<Option<Vec<f64>>> {
    let none = || vec![None; hits.len()];
    let dt = 1.0 / fs as f64;
    let guard = (0.002 * fs as f64) as usize;
    // Ringing is only worth modelling where it stands out of the channel's noise; on a noisy
    // recording the noise alone would otherwise pass the relative test below and every record
    // would pay for a fit that can only model noise.
    let floor = noise_floor_rms(x, fs);
    // Which records carry ringing?
    let flagged: Vec<bool> = hits
        .iter()
        .enumerate()
        .map(|(i, h)| {
            let Some(s) = h.trigger.checked_sub(pre) else {
                return false;
            };
            if i == 0 || s + n > x.len() || h.start <= s + guard {
                return false;
            }
            let pre_seg = &x[s..h.start - guard];
            let mean = pre_seg.iter().sum::<f64>() / pre_seg.len() as f64;
            let rms = (pre_seg.iter().map(|v| (v - mean).powi(2)).sum::<f64>()
                / pre_seg.len() as f64)
                .sqrt();
            let peak = x[h.start..s + n]
                .iter()
                .fold(0.0f64, |m, v| m.max((v - mean).abs()));
            rms * std::f64::consts::SQRT_2 > RINGING_THRESHOLD * peak && rms > 3.0 * floor
        })
        .collect();
    if !flagged.iter().any(|&f| f) {
        return none();
    }
    // Free-decay segments: after each pulse, up to the next pulse (or the end of the file).
    let mut segs: Vec<(usize, usize)> = Vec::new();
    for (i, h) in hits.iter().enumerate() {
        let s = h.end + guard;
        let e = hits
            .get(i + 1)
            .map_or(x.len(), |nx| nx.start.saturating_sub(guard));
        if e > s {
            segs.push((s, e));
        }
    }
    let len = segs.iter().map(|(s, e)| e - s).min().unwrap_or(0);
    if len < (0.2 * fs as f64) as usize || segs.len() < 2 {
        return none();
    }
    // Bounded work per station: at most 1500 lines and six decays feed the pole estimate (the
    // decays' poles are sharp; a coarser line spacing resolves them once the window is removed).
    let max_len = (1500.0 * fs as f64 / (1.3 * band_hz[1] - 0.8 * band_hz[0]).max(1.0)) as usize;
    let len = super::frf::smooth_len_at_most(len.min(max_len.max((0.1 * fs as f64) as usize)));
    let step = segs.len().div_ceil(6);
    let segs: Vec<(usize, usize)> = segs.into_iter().step_by(step).collect();
    let dp = decay_poles(x, &segs, len, dt, band_hz);
    let Some(poles) = dp else {
        return none();
    };
    hits.iter()
        .enumerate()
        .map(|(i, h)| {
            if !flagged[i] {
                return None;
            }
            let s = h.trigger - pre;
            fit_and_extrapolate(
                x,
                &poles,
                h.start.saturating_sub(guard),
                (0.3 / dt) as usize,
                s,
                n,
                dt,
            )
        })
        .collect()
}

/// The channel's noise rms: the 5th percentile of the rms of 10 ms blocks (the quietest stretch
/// of a tap recording is the noise between taps, or the lead-in before the first).
fn noise_floor_rms(x: &[f64], fs: u32) -> f64 {
    let block = ((0.01 * fs as f64) as usize).max(16);
    let mut r: Vec<f64> = x
        .chunks_exact(block)
        .map(|c| {
            let m = crate::numeric::lane_sum(c, |v| v) / block as f64;
            (crate::numeric::lane_sum(c, |v| (v - m) * (v - m)) / block as f64).sqrt()
        })
        .collect();
    if r.is_empty() {
        return 0.0;
    }
    let k = r.len() / 20;
    *r.select_nth_unstable_by(k, f64::total_cmp).1
}

/// True poles (rad/s) of the free decays, from LSCF over their spectra.
fn decay_poles(
    x: &[f64],
    segs: &[(usize, usize)],
    len: usize,
    dt: f64,
    band_hz: [f64; 2],
) -> Option<Vec<Complex64>> {
    let fs = 1.0 / dt;
    let tau = exponential_tau_s(len as f64 * dt, 0.01);
    let df = fs / len as f64;
    let k_lo = ((band_hz[0] * 0.8) / df).ceil().max(1.0) as usize;
    let k_hi = (((band_hz[1] * 1.1).min(0.45 * fs)) / df).floor() as usize;
    if k_hi <= k_lo + 8 {
        return None;
    }
    let lines = k_lo..k_hi + 1;
    let freq: Vec<f64> = lines.clone().map(|k| k as f64 * df).collect();
    let mut plan = SpectrumPlan::new(len);
    let mut h = Vec::with_capacity(segs.len());
    for &(s, _) in segs {
        let mut seg: Vec<f64> = x[s..s + len].to_vec();
        let mean = seg.iter().sum::<f64>() / len as f64;
        seg.iter_mut().for_each(|v| *v -= mean);
        apply_exponential(&mut seg, 0, dt, tau);
        h.push(plan.lines(&seg, dt, lines.clone()));
    }
    // Relative weighting, as for FRFs of uniform coherence.
    let w: Vec<Vec<f64>> = h
        .iter()
        .map(|v| {
            let top = v.iter().fold(0.0f64, |m, c| m.max(c.norm()));
            v.iter()
                .map(|c| 1.0 / c.norm().max(1e-6 * top).max(f64::MIN_POSITIVE))
                .collect()
        })
        .collect();
    let order = 40.min(freq.len().saturating_sub(2) / 2);
    if order < 4 {
        return None;
    }
    // Only the highest order's poles are used (and the one below, to classify them).
    let st = stabilization_from(&freq, &h, &w, order, order, StabilityCriteria::default()).ok()?;
    // Poles stable at the highest orders: take those of the last order whose status is stable.
    let top = st.poles.iter().map(|p| p.order).max()?;
    let poles: Vec<Complex64> = st
        .poles
        .iter()
        .filter(|p| p.order == top && p.status >= PoleStatus::FrequencyDamping)
        .map(|p| p.lambda + 1.0 / tau)
        .filter(|l| l.re < 0.0 && -l.re / l.norm() < 0.05)
        .collect();
    (!poles.is_empty()).then_some(poles)
}

/// The most poles a ringing model keeps: the slowest-decaying, which are what rings on into the
/// next record; the bound keeps the fit's cost per record fixed (its normal matrix grows with
/// the square of the pole count).
const MAX_POLES: usize = 16;

/// Fits Σ_r (p_r Re e^{λ_r t} + q_r Im e^{λ_r t}) to `x` over the `m` samples before `anchor`
/// (t = 0 at `anchor`), and returns the model over `[s, s + n)`.
fn fit_and_extrapolate(
    x: &[f64],
    poles: &[Complex64],
    anchor: usize,
    m: usize,
    s: usize,
    n: usize,
    dt: f64,
) -> Option<Vec<f64>> {
    let m = m.min(anchor);
    // Poles that decay by more than e^20 over the fit window would overflow the basis when
    // evaluated backwards in time, and have died out long before the next tap anyway.
    let window_s = m as f64 * dt;
    let mut poles: Vec<Complex64> = poles
        .iter()
        .copied()
        .filter(|l| -l.re * window_s < 20.0)
        .collect();
    poles.sort_by(|a, b| (-a.re).total_cmp(&(-b.re)));
    poles.truncate(MAX_POLES);
    let poles = poles.as_slice();
    if poles.is_empty() || m < 4 * poles.len() + 8 {
        return None;
    }
    let step = (m / 2000).max(1);
    let rows: Vec<usize> = (anchor - m..anchor).step_by(step).collect();
    let cols = 2 * poles.len() + 1;
    // The basis at equally spaced rows by recurrence (restarted from the exact value every 256
    // rows), as for the extrapolation below; the normal equations by one matrix product.
    let mut basis = DMatrix::<f64>::zeros(rows.len(), cols);
    let t0 = (rows[0] as f64 - anchor as f64) * dt;
    for (r, l) in poles.iter().enumerate() {
        let mult = (l * (step as f64 * dt)).exp();
        let mut e = Complex64::new(0.0, 0.0);
        for k in 0..rows.len() {
            if k % 256 == 0 {
                e = (l * (t0 + (k * step) as f64 * dt)).exp();
            } else {
                e *= mult;
            }
            basis[(k, 2 * r)] = e.re;
            basis[(k, 2 * r + 1)] = e.im;
        }
    }
    basis.column_mut(cols - 1).fill(1.0);
    let y = DVector::<f64>::from_iterator(rows.len(), rows.iter().map(|&i| x[i]));
    let ata = basis.tr_mul(&basis);
    let atb = basis.tr_mul(&y);
    let coef = crate::numeric::svd_solve(ata, &atb, 1e-12)?;
    // The model over the record, pole by pole. A term y_k = Re(C·z^k) obeys the real recurrence
    // y_{k+L} = 2 Re(z^L)·y_k − |z^L|²·y_{k−L}: LANES interleaved chains (sample k + j advances
    // by L = LANES samples) of two products and a difference per sample, which the compiler
    // runs side by side in vector registers instead of a complex product (six operations) and
    // an exponential and a sine–cosine pair. Each 1024-sample block restarts the chains from
    // exact values, so round-off cannot build up. The constant term is the baseline, which the
    // chain removes itself.
    const LANES: usize = 8;
    // The first pole's term is written, the others added: the buffer is never read before it is
    // written (a read of fresh zeroed pages maps the shared zero page, and the write after it
    // copies that page: a fault and a TLB shootdown across the cores per 4 KiB).
    let mut out = vec![0.0; n];
    for (r, l) in poles.iter().enumerate() {
        let c = Complex64::new(coef[2 * r], -coef[2 * r + 1]);
        let one = (l * dt).exp();
        let stride = (l * (LANES as f64 * dt)).exp();
        let (c1, c2) = (2.0 * stride.re, stride.norm_sqr());
        for (b, block) in out.chunks_mut(1024).enumerate() {
            let (mut prev, mut cur) = ([0.0f64; LANES], [0.0f64; LANES]);
            let mut e = (l * ((s + 1024 * b) as f64 - anchor as f64) * dt).exp();
            for j in 0..LANES {
                prev[j] = (c * e).re;
                cur[j] = (c * e * stride).re;
                e *= one;
            }
            let (chunks, rest) = block.as_chunks_mut::<LANES>();
            let step = |prev: &mut [f64; LANES], cur: &mut [f64; LANES]| {
                for j in 0..LANES {
                    let next = c1 * cur[j] - c2 * prev[j];
                    prev[j] = cur[j];
                    cur[j] = next;
                }
            };
            if r == 0 {
                for ch in chunks {
                    *ch = prev;
                    step(&mut prev, &mut cur);
                }
                for (j, o) in rest.iter_mut().enumerate() {
                    *o = prev[j];
                }
            } else {
                for ch in chunks {
                    for j in 0..LANES {
                        ch[j] += prev[j];
                    }
                    step(&mut prev, &mut cur);
                }
                for (j, o) in rest.iter_mut().enumerate() {
                    *o += prev[j];
                }
            }
        }
    }
    Some(out)
}

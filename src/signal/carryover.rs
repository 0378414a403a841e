//! Ringing carried over from earlier hits.
//!
//! A lightly damped part still rings when the next tap lands; that free decay is in the next
//! record, uncorrelated with its force, and biases the FRF (most of all the damping of the modes
//! that ring longest). Between two taps the response is a pure free decay, often a second long:
//! its spectra give the ringing poles accurately (LSCF over free-decay segments, the same
//! estimator as the modal stage); the decay is then fitted just before each tap and its
//! continuation subtracted from that tap's record.
//!
//! The poles are the part's, not the station's: a test estimates them once, from decays lent by a
//! few stations spread along the part ([`lend_decays`], [`test_poles`]), and each station fits
//! its records with them. A record whose ringing they leave standing out of the noise (a mode the
//! lenders sat at a node of) is modelled with its station's own estimate instead.

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

/// Free decays each pilot station lends to the test's pole estimate (per channel).
const PILOT_DECAYS: usize = 3;

/// Lines over the band of a station's own pole estimate: bounded work per station (the decays'
/// poles are sharp; a coarser line spacing resolves them once the window is removed).
const STATION_LINES: f64 = 1500.0;

/// Lines over the band of the test's estimate: made once, and every station's model rests on
/// it, so its errors do not average out over the stations as those of their own estimates do.
const TEST_LINES: f64 = 4000.0;

/// Where the poles of a station's ringing model come from.
#[derive(Debug, Clone, Copy)]
pub enum RingingPoles<'a> {
    /// From the station's own free decays.
    Own,
    /// The test's poles, estimated once from a few stations ([`test_poles`]); a record whose
    /// ringing they leave standing out of the noise is modelled with the station's own poles
    /// instead.
    Test(&'a [Complex64]),
}

/// Which of a channel's records carry ringing worth removing.
struct Ringing {
    flagged: Vec<bool>,
    /// The channel's noise rms.
    floor: f64,
    /// Per hit: the record's largest deviation from its pretrigger mean after the pulse.
    peaks: Vec<f64>,
}

impl Ringing {
    fn of(x: &[f64], fs: u32, hits: &[PulseSpan], pre: usize, n: usize) -> Self {
        let guard = guard(fs);
        let mut peaks = vec![0.0; hits.len()];
        // Per hit: the rms of the stretch before its pulse, where carried-over ringing would show.
        let rms: Vec<Option<f64>> = hits
            .iter()
            .enumerate()
            .map(|(i, h)| {
                let s = h.trigger.checked_sub(pre)?;
                if i == 0 || s + n > x.len() || h.start <= s + guard {
                    return None;
                }
                let (mean, rms) = crate::numeric::mean_rms(&x[s..h.start - guard]);
                let (lo, hi) = crate::numeric::extrema(&x[h.start..s + n]);
                peaks[i] = (hi - mean).max(mean - lo);
                Some(rms)
            })
            .collect();
        // Ringing is only worth modelling where it stands out of the channel's noise; on a noisy
        // recording the noise alone would otherwise pass the relative test and every record
        // would pay for a fit that can only model noise. The floor costs a pass over the whole
        // channel: taken only when some record passes the relative test (a force channel's
        // never does).
        let standing_over = |floor: f64| {
            rms.iter()
                .zip(&peaks)
                .map(move |(r, &p)| r.is_some_and(|r| standing(r, p, floor)))
        };
        let floor = if standing_over(0.0).any(|b| b) {
            noise_floor_rms(x, fs)
        } else {
            0.0
        };
        let flagged = standing_over(floor).collect();
        Self {
            flagged,
            floor,
            peaks,
        }
    }

    fn any(&self) -> bool {
        self.flagged.iter().any(|&f| f)
    }
}

/// Ringing of this rms is worth removing from a record of this peak, over this noise floor.
fn standing(rms: f64, peak: f64, floor: f64) -> bool {
    rms * std::f64::consts::SQRT_2 > RINGING_THRESHOLD * peak && rms > 3.0 * floor
}

/// Samples kept clear of a pulse on either side.
fn guard(fs: u32) -> usize {
    (0.002 * fs as f64) as usize
}

/// The free decays of a channel: after each pulse up to the next (or the end of the file).
fn free_decays(x: &[f64], fs: u32, hits: &[PulseSpan]) -> Vec<(usize, usize)> {
    let guard = guard(fs);
    hits.iter()
        .enumerate()
        .filter_map(|(i, h)| {
            let s = h.end + guard;
            let e = hits
                .get(i + 1)
                .map_or(x.len(), |nx| nx.start.saturating_sub(guard));
            (e > s).then_some((s, e))
        })
        .collect()
}

/// The length of free decay a pole estimate uses: the shortest decay offered, but at most what
/// gives `lines` lines over the band (the decays' poles are sharp; a coarser line spacing
/// resolves them once the window is removed), so that the work per estimate is bounded. `None`
/// when the decays are too short (under 0.2 s) or too few to estimate from.
fn decay_len(
    shortest: usize,
    count: usize,
    fs: u32,
    band_hz: [f64; 2],
    lines: f64,
) -> Option<usize> {
    if shortest < (0.2 * fs as f64) as usize || count < 2 {
        return None;
    }
    let max_len = (lines * fs as f64 / (1.3 * band_hz[1] - 0.8 * band_hz[0]).max(1.0)) as usize;
    Some(super::frf::smooth_len_at_most(
        shortest.min(max_len.max((0.1 * fs as f64) as usize)),
    ))
}

/// Copies of up to three free decays of channel `x` (each cut to the length an estimate uses),
/// when any of its records carries ringing worth removing; empty otherwise.
pub fn lend_decays(
    x: &[f64],
    fs: u32,
    hits: &[PulseSpan],
    pre: usize,
    n: usize,
    band_hz: [f64; 2],
) -> Vec<Vec<f64>> {
    if !Ringing::of(x, fs, hits, pre, n).any() {
        return Vec::new();
    }
    spread_decays(x, fs, hits, band_hz, TEST_LINES, PILOT_DECAYS)
        .into_iter()
        .flatten()
        .map(<[f64]>::to_vec)
        .collect()
}

/// Up to `count` of the channel's free decays, spread over the recording and all cut to the
/// length an estimate over `lines` lines uses ([`decay_len`]); `None` when they are too short or
/// too few.
fn spread_decays<'x>(
    x: &'x [f64],
    fs: u32,
    hits: &[PulseSpan],
    band_hz: [f64; 2],
    lines: f64,
    count: usize,
) -> Option<Vec<&'x [f64]>> {
    let segs = free_decays(x, fs, hits);
    let shortest = segs.iter().map(|(s, e)| e - s).min().unwrap_or(0);
    let len = decay_len(shortest, segs.len(), fs, band_hz, lines)?;
    Some(
        segs.iter()
            .step_by(segs.len().div_ceil(count))
            .map(|&(s, _)| &x[s..s + len])
            .collect(),
    )
}

/// The poles of a test's ringing (rad/s), from free decays lent by a few of its stations
/// ([`lend_decays`]): one estimate for the part, where each station would otherwise repeat it.
pub fn test_poles(decays: &[Vec<f64>], fs: u32, band_hz: [f64; 2]) -> Option<Vec<Complex64>> {
    let shortest = decays.iter().map(Vec::len).min()?;
    let len = decay_len(shortest, decays.len(), fs, band_hz, TEST_LINES)?;
    let segs: Vec<&[f64]> = decays.iter().map(|d| &d[..len]).collect();
    decay_poles(&segs, 1.0 / fs as f64, band_hz)
}

/// For each hit, the carried-over ringing of channel `x` in its record `[trigger − pre,
/// trigger − pre + n)`, to subtract; `None` where there is none worth removing or it cannot be
/// modelled. `band_hz` bounds the poles looked for.
pub fn corrections(
    x: &[f64],
    fs: u32,
    hits: &[PulseSpan],
    pre: usize,
    n: usize,
    band_hz: [f64; 2],
    poles: RingingPoles,
) -> Vec<Option<RingingModel>> {
    let none = || vec![None; hits.len()];
    let dt = 1.0 / fs as f64;
    let ringing = Ringing::of(x, fs, hits, pre, n);
    if !ringing.any() {
        return none();
    }
    let fit = |i: usize, poles: &[Complex64]| -> Option<Fitted> {
        let h = &hits[i];
        fit_decay(
            x,
            poles,
            h.start.saturating_sub(guard(fs)),
            (0.3 / dt) as usize,
            h.trigger - pre,
            dt,
        )
    };
    let mut out = none();
    if let RingingPoles::Test(test) = poles {
        // The test's poles serve every record whose ringing they explain: what they leave of it
        // would not itself be worth removing.
        let mut unexplained = false;
        for (i, o) in out.iter_mut().enumerate() {
            if !ringing.flagged[i] {
                continue;
            }
            match fit(i, test) {
                Some(f) if !standing(f.residual_rms, ringing.peaks[i], ringing.floor) => {
                    *o = Some(f.model);
                }
                _ => unexplained = true,
            }
        }
        if !unexplained {
            return out;
        }
    }
    // Bounded work per station: at most six decays feed the pole estimate.
    let Some(own) = spread_decays(x, fs, hits, band_hz, STATION_LINES, 6)
        .and_then(|own| decay_poles(&own, dt, band_hz))
    else {
        return out;
    };
    for (i, o) in out.iter_mut().enumerate() {
        if ringing.flagged[i] && o.is_none() {
            *o = fit(i, &own).map(|f| f.model);
        }
    }
    out
}

/// The channel's noise rms: the 1st percentile of the rms of 10 ms blocks (the quietest stretch
/// of a tap recording is the noise between taps, or the lead-in before the first). A part of very light damping tapped every few seconds never falls silent
/// between taps: its lead-in may be only a few per cent of the recording, and a higher
/// percentile then measured the ringing itself and judged it too small to remove.
fn noise_floor_rms(x: &[f64], fs: u32) -> f64 {
    let block = ((0.01 * fs as f64) as usize).max(16);
    let mut r: Vec<f64> = x
        .chunks_exact(block)
        .map(|c| crate::numeric::mean_rms(c).1)
        .collect();
    if r.is_empty() {
        return 0.0;
    }
    let k = r.len() / 100;
    *r.select_nth_unstable_by(k, f64::total_cmp).1
}

/// True poles (rad/s) of the free decays, from LSCF over their spectra.
fn decay_poles(segs: &[&[f64]], dt: f64, band_hz: [f64; 2]) -> Option<Vec<Complex64>> {
    let len = segs.first()?.len();
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
    // The decays' spectra, a plan per core (a test lends a dozen decays; a station's own
    // estimate runs inside a parallel pass, where this is one serial chunk).
    let chunks = crate::numeric::core_ranges(segs.len(), 1);
    let h: Vec<Vec<Complex64>> = crate::numeric::par_map(&chunks, |&(a, b)| {
        let mut plan = SpectrumPlan::new(len);
        let mut seg = Vec::with_capacity(len);
        segs[a..b]
            .iter()
            .map(|s| {
                seg.clear();
                seg.extend_from_slice(&s[..len]);
                let mean = seg.iter().sum::<f64>() / len as f64;
                seg.iter_mut().for_each(|v| *v -= mean);
                apply_exponential(&mut seg, 0, dt, tau);
                plan.lines(&seg, dt, lines.clone())
            })
            .collect::<Vec<_>>()
    })
    .into_iter()
    .flatten()
    .collect();
    // Each decay scaled by its peak, every line alike: what is subtracted later is the ringing's
    // energy, which sits at the peaks. Weighting by 1/|H| (the shape in decibels) spent the
    // model on the floor between peaks and, over a wide band, left a split pair of very light
    // damping (0.04 %, 1.2 % apart) unresolved and its ringing in the records.
    let w: Vec<Vec<f64>> = h
        .iter()
        .map(|v| {
            let top = v.iter().fold(0.0f64, |m, c| m.max(c.norm()));
            vec![1.0 / top.max(f64::MIN_POSITIVE); v.len()]
        })
        .collect();
    let order = decay_order(&h, &w).min(freq.len().saturating_sub(2) / 2);
    if order < 4 {
        return None;
    }
    // A wide band's z-domain fit is ill-conditioned at its low end, where the poles crowd near
    // z = 1: there a split pair of very light damping came out as one pole, or none, and its
    // ringing stayed in the records. Each resonance is fitted again over a narrow band around
    // it (±15 %), and the poles of that band's middle (±7 %) replace the wide band's there.
    let mut bands: Vec<(f64, usize, usize)> = Vec::new();
    for k in resonance_lines(&h, &w) {
        let f = freq[k];
        if bands
            .iter()
            .any(|&(g, ..)| (f / g - 1.0).abs() < LOCAL_KEEP)
        {
            continue;
        }
        let k0 = freq.partition_point(|&x| x < f * (1.0 - LOCAL_HALF));
        let k1 = freq.partition_point(|&x| x <= f * (1.0 + LOCAL_HALF));
        bands.push((f, k0, k1));
    }
    // The wide fit and the narrow ones are independent of each other: solved side by side
    // (the largest first), then merged in the order above.
    let fits: Vec<Option<(usize, usize, usize)>> = std::iter::once(Some((0, freq.len(), order)))
        .chain(bands.iter().map(|&(_, k0, k1)| {
            (k1 >= k0 + 24).then(|| (k0, k1, LOCAL_ORDER.min((k1 - k0 - 2) / 2)))
        }))
        .collect();
    let cost = |t: &Option<(usize, usize, usize)>| {
        t.map_or(0.0, |(k0, k1, o)| ((k1 - k0) * (o + 1) * (o + 1)) as f64)
    };
    let solved = crate::numeric::par_map_dearest_first(&fits, cost, |t| {
        let (k0, k1, o) = (*t)?;
        if (k0, k1) == (0, freq.len()) {
            return top_order_poles(&freq, &h, &w, o, tau);
        }
        let part = |v: &Vec<Complex64>| v[k0..k1].to_vec();
        let hl: Vec<Vec<Complex64>> = h.iter().map(part).collect();
        let wl: Vec<Vec<f64>> = w.iter().map(|v| v[k0..k1].to_vec()).collect();
        top_order_poles(&freq[k0..k1], &hl, &wl, o, tau)
    });
    let mut solved = solved.into_iter();
    let mut poles = solved.next().flatten()?;
    for (&(f, ..), local) in bands.iter().zip(solved) {
        let Some(local) = local else {
            continue;
        };
        let middle =
            |l: &Complex64| (l.norm() / std::f64::consts::TAU / f - 1.0).abs() < LOCAL_KEEP;
        poles.retain(|l| !middle(l));
        poles.extend(local.into_iter().filter(middle));
    }
    // Mains hum is steady, not ringing: a pole at a harmonic of 50 or 60 Hz, extrapolated from
    // the gap before a tap as a decay, would take hum out of some records and not others, and
    // their FRFs would then disagree.
    poles.retain(|l| !at_mains_harmonic(l.im / std::f64::consts::TAU, (0.5 * df).max(0.3)));
    (!poles.is_empty()).then_some(poles)
}

/// Half-width of a resonance's narrow band, as a fraction of its frequency; the poles of the
/// middle `LOCAL_KEEP` of it are kept; the order of its fit.
const LOCAL_HALF: f64 = 0.15;
const LOCAL_KEEP: f64 = 0.07;
const LOCAL_ORDER: usize = 24;

/// The true poles (the window's damping removed) of the highest order `order` of an LSCF over
/// `h`, that are stable against the order below and lightly damped.
fn top_order_poles(
    freq: &[f64],
    h: &[Vec<Complex64>],
    w: &[Vec<f64>],
    order: usize,
    tau: f64,
) -> Option<Vec<Complex64>> {
    // Only the highest order's poles are used (and the one below, to classify them).
    let st = stabilization_from(freq, h, w, order, order, StabilityCriteria::default()).ok()?;
    let top = st.poles.iter().map(|p| p.order).max()?;
    Some(
        st.poles
            .iter()
            .filter(|p| p.order == top && p.status >= PoleStatus::FrequencyDamping)
            .map(|p| p.lambda + 1.0 / tau)
            .filter(|l| l.re < 0.0 && -l.re / l.norm() < 0.05)
            .collect(),
    )
}

/// Whether `f_hz` lies within `tol_hz` of one of the first eight harmonics of 50 or 60 Hz (the
/// hum's strong ones; above them a resonance is likelier than hum).
fn at_mains_harmonic(f_hz: f64, tol_hz: f64) -> bool {
    super::near_mains_harmonic(f_hz, tol_hz, &super::MAINS_HZ, 8)
}

/// The model order for free decays' spectra: room for two poles per resonance they show and as
/// many again for what lies outside the band, the hum and the noise — at least 40 (the order
/// that served a few resonances), at most 80.
fn decay_order(h: &[Vec<Complex64>], w: &[Vec<f64>]) -> usize {
    (4 * resonance_lines(h, w).len() + 16).clamp(40, 80)
}

/// The resonances the decays' spectra show, strongest first: lines that top their neighbours
/// within ±3 lines and stand within 40 dB of the highest line of the decays' summed power.
fn resonance_lines(h: &[Vec<Complex64>], w: &[Vec<f64>]) -> Vec<usize> {
    let n = h.first().map_or(0, Vec::len);
    let power: Vec<f64> = (0..n)
        .map(|k| {
            h.iter()
                .zip(w)
                .map(|(v, wo)| (v[k] * wo[k]).norm_sqr())
                .sum()
        })
        .collect();
    let top = power.iter().copied().fold(0.0f64, f64::max);
    let mut peaks: Vec<usize> = (0..n)
        .filter(|&k| {
            let around = &power[k.saturating_sub(3)..(k + 4).min(n)];
            power[k] >= 1e-4 * top && around.iter().all(|&p| p <= power[k])
        })
        .collect();
    peaks.sort_by(|&a, &b| power[b].total_cmp(&power[a]));
    peaks
}

/// The carried-over ringing of one record: Σ_r Re(c_r·e^{λ_r·t}), t from the sample the fit
/// was anchored at. Kept as terms and evaluated into the record when it is cut, so that no
/// record-long model is stored per hit.
#[derive(Debug, Clone, PartialEq)]
pub struct RingingModel {
    /// Poles λ_r, rad/s, and their complex amplitudes c_r, in full-scale units.
    terms: Vec<(Complex64, Complex64)>,
    /// Samples from the anchor to the record's first sample.
    offset: f64,
    /// Sample interval, s.
    dt: f64,
}

impl RingingModel {
    /// `out = record − model`, over the record's length.
    pub fn subtract(&self, record: &[f64], out: &mut Vec<f64>) {
        // A term y_k = Re(c·z^k) obeys the real recurrence y_{k+L} = 2 Re(z^L)·y_k −
        // |z^L|²·y_{k−L}: LANES interleaved chains (sample k + j advances by L = LANES samples)
        // of two products and a difference per sample, which the compiler runs side by side in
        // vector registers instead of a complex product (six operations) and an exponential and
        // a sine–cosine pair. Each 1024-sample block restarts the chains from exact values, so
        // round-off cannot build up; the block is copied and every term taken from it while it
        // sits in the first-level cache.
        const LANES: usize = 8;
        const BLOCK: usize = 1024;
        let dt = self.dt;
        let steps: Vec<[Complex64; 4]> = self
            .terms
            .iter()
            .map(|&(l, c)| [l, c, (l * dt).exp(), (l * (LANES as f64 * dt)).exp()])
            .collect();
        out.clear();
        out.reserve(record.len());
        for (b, src) in record.chunks(BLOCK).enumerate() {
            let at = out.len();
            out.extend_from_slice(src);
            let block = &mut out[at..];
            for &[l, c, one, stride] in &steps {
                let (c1, c2) = (2.0 * stride.re, stride.norm_sqr());
                let (mut prev, mut cur) = ([0.0f64; LANES], [0.0f64; LANES]);
                let mut e = (l * (self.offset + (BLOCK * b) as f64) * dt).exp();
                for j in 0..LANES {
                    prev[j] = (c * e).re;
                    cur[j] = (c * e * stride).re;
                    e *= one;
                }
                let (chunks, rest) = block.as_chunks_mut::<LANES>();
                for ch in chunks {
                    for j in 0..LANES {
                        ch[j] -= prev[j];
                        let next = c1 * cur[j] - c2 * prev[j];
                        prev[j] = cur[j];
                        cur[j] = next;
                    }
                }
                for (j, o) in rest.iter_mut().enumerate() {
                    *o -= prev[j];
                }
            }
        }
    }
}

/// A record's ringing model, and how well it fitted the decay it was fitted to.
struct Fitted {
    model: RingingModel,
    /// Rms of what the model left of the decay over the fit window.
    residual_rms: f64,
}

/// The most poles a ringing model keeps: the slowest-decaying, which are what rings on into the
/// next record; the bound keeps the fit's cost per record fixed (its normal matrix grows with
/// the square of the pole count).
const MAX_POLES: usize = 16;

/// Fits Σ_r (p_r Re e^{λ_r t} + q_r Im e^{λ_r t}) + a constant to `x` over the `m` samples
/// before `anchor` (t = 0 at `anchor`); the model's decaying terms are then those of the record
/// starting at sample `s` (the constant is the baseline, which the record's own removes).
fn fit_decay(
    x: &[f64],
    poles: &[Complex64],
    anchor: usize,
    m: usize,
    s: usize,
    dt: f64,
) -> Option<Fitted> {
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
    // Hum near a ringing pole is fitted alongside, as a steady line, and not kept: left out, a
    // line a few hertz away leaks into that pole's amplitude over a window this short, and the
    // leak is then extrapolated through the record as ringing.
    let leak_hz = 3.0 / window_s;
    let mut hum: Vec<Complex64> = Vec::new();
    for k in 1..=8u32 {
        for mains in super::MAINS_HZ {
            let f = f64::from(k) * mains;
            let near_pole = poles
                .iter()
                .any(|l| (l.im / std::f64::consts::TAU - f).abs() < leak_hz);
            if near_pole
                && !hum
                    .iter()
                    .any(|h| (h.im / std::f64::consts::TAU - f).abs() < 1e-9)
            {
                hum.push(Complex64::new(0.0, std::f64::consts::TAU * f));
            }
        }
    }
    let step = (m / 2000).max(1);
    let rows: Vec<usize> = (anchor - m..anchor).step_by(step).collect();
    let cols = 2 * (poles.len() + hum.len()) + 1;
    // The basis at equally spaced rows by recurrence (restarted from the exact value every 256
    // rows); the normal equations by one matrix product.
    let mut basis = DMatrix::<f64>::zeros(rows.len(), cols);
    let t0 = (rows[0] as f64 - anchor as f64) * dt;
    for (r, l) in poles.iter().chain(&hum).enumerate() {
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
    let residual_rms = ((&y - &basis * &coef).norm_squared() / rows.len() as f64).sqrt();
    let terms = poles
        .iter()
        .enumerate()
        .map(|(r, &l)| (l, Complex64::new(coef[2 * r], -coef[2 * r + 1])))
        .collect();
    Some(Fitted {
        model: RingingModel {
            terms,
            offset: s as f64 - anchor as f64,
            dt,
        },
        residual_rms,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    const FS: u32 = 8192;

    /// Poles of two modes, λ = −ζω + iω√(1 − ζ²) (the damped free vibration of a single-degree
    /// oscillator, e.g. Inman, Engineering Vibration, §1.3). Off the mains harmonics, which
    /// the ringing model leaves to the hum (`at_mains_harmonic`).
    fn poles() -> [Complex64; 2] {
        [(212.0, 0.001), (530.0, 0.0008)].map(|(f, z): (f64, f64)| {
            let w = 2.0 * std::f64::consts::PI * f;
            Complex64::new(-z * w, w * (1.0 - z * z).sqrt())
        })
    }

    /// Response to unit taps at `taps` (samples): Σ_taps Σ_r a_r e^{σ_r t} sin(ω_r t), and that
    /// of the tap `k` alone.
    fn response(taps: &[usize], len: usize, only: Option<usize>) -> Vec<f64> {
        let dt = 1.0 / FS as f64;
        let amp = [1.0, 0.6];
        let mut x = vec![0.0; len];
        for (k, &t0) in taps.iter().enumerate() {
            if only.is_some_and(|o| o != k) {
                continue;
            }
            for (i, v) in x.iter_mut().enumerate().skip(t0) {
                let t = (i - t0) as f64 * dt;
                for (l, a) in poles().iter().zip(amp) {
                    *v += a * (l.re * t).exp() * (l.im * t).sin();
                }
            }
        }
        x
    }

    fn spans(taps: &[usize]) -> Vec<PulseSpan> {
        taps.iter()
            .map(|&t| PulseSpan {
                trigger: t,
                start: t,
                end: t + 8,
            })
            .collect()
    }

    /// What is left of the earlier taps' ringing in each later record after the correction, as a
    /// fraction of the record's own peak.
    fn leftover(ringing: RingingPoles) -> Vec<f64> {
        let taps: Vec<usize> = (0..5).map(|k| (k + 1) * FS as usize).collect();
        let len = taps[4] + FS as usize;
        let x = response(&taps, len, None);
        let (pre, n) = (400, 4096);
        let corr = corrections(&x, FS, &spans(&taps), pre, n, [50.0, 1000.0], ringing);
        (1..taps.len())
            .map(|k| {
                let s = taps[k] - pre;
                let own = response(&taps, len, Some(k));
                let model = corr[k].as_ref().expect("a later record carries ringing");
                let mut fixed = Vec::new();
                model.subtract(&x[s..s + n], &mut fixed);
                let peak = own[s..s + n].iter().fold(0.0f64, |m, v| m.max(v.abs()));
                fixed
                    .iter()
                    .zip(&own[s..s + n])
                    .fold(0.0f64, |m, (f, o)| m.max((f - o).abs()))
                    / peak
            })
            .collect()
    }

    #[test]
    fn the_model_is_the_decay_it_describes() {
        // Re(c·e^{λt}) evaluated directly against the recurrence, over several restart blocks.
        let dt = 1.0 / FS as f64;
        let terms: Vec<(Complex64, Complex64)> = poles()
            .iter()
            .zip([Complex64::new(0.3, -0.7), Complex64::new(-0.2, 0.1)])
            .map(|(&l, c)| (l, c))
            .collect();
        let model = RingingModel {
            terms: terms.clone(),
            offset: 1234.0,
            dt,
        };
        let record: Vec<f64> = (0..5000).map(|i| (i as f64 * 0.01).sin()).collect();
        let mut out = Vec::new();
        model.subtract(&record, &mut out);
        for (i, (o, r)) in out.iter().zip(&record).enumerate() {
            let t = (1234.0 + i as f64) * dt;
            let m: f64 = terms.iter().map(|(l, c)| (c * (l * t).exp()).re).sum();
            assert!((r - o - m).abs() < 1e-12, "sample {i}: {} vs {m}", r - o);
        }
    }

    #[test]
    fn lent_decays_give_the_parts_poles() {
        let taps: Vec<usize> = (0..5).map(|k| (k + 1) * FS as usize).collect();
        let x = response(&taps, taps[4] + FS as usize, None);
        let decays = lend_decays(&x, FS, &spans(&taps), 400, 4096, [50.0, 1000.0]);
        assert!((2..=3).contains(&decays.len()), "{}", decays.len());
        let got = test_poles(&decays, FS, [50.0, 1000.0]).unwrap();
        for l in poles() {
            assert_pole_found(&got, l, 1e-6, 0.01);
        }
    }

    #[test]
    fn test_poles_serve_and_a_missing_one_is_found_by_the_station() {
        // Exact poles, the station's own estimate, and a test estimate that lacks the 530 Hz
        // mode (its lenders sat at its node): every way, under 0.1 % of the record's peak is
        // left of the earlier taps' ringing.
        let p = poles();
        // Without the station's own estimate, the one-pole model would leave the ringing standing.
        let taps: Vec<usize> = (0..5).map(|k| (k + 1) * FS as usize).collect();
        let x = response(&taps, taps[4] + FS as usize, None);
        let dt = 1.0 / FS as f64;
        let one = fit_decay(&x, &p[..1], taps[1], (0.3 / dt) as usize, taps[1] - 400, dt).unwrap();
        let r = Ringing::of(&x, FS, &spans(&taps), 400, 4096);
        assert!(standing(one.residual_rms, r.peaks[1], r.floor));
        for (name, ringing) in [
            ("test poles", RingingPoles::Test(&p)),
            ("own", RingingPoles::Own),
            ("one missing", RingingPoles::Test(&p[..1])),
        ] {
            for (k, l) in leftover(ringing).iter().enumerate() {
                assert!(*l < 1e-3, "{name}: record {}: {l}", k + 1);
            }
        }
    }

    /// The decay model's order follows the resonances the spectra show: two poles per
    /// resonance and as many again for the rest, within 40–80. Each resonance is a single-degree
    /// line shape c/(iω − λ) (the spectrum of a free decay, e.g. Ewins, Modal Testing, 2000,
    /// §2.3, from memory); a line at 1e-5 of the top (below the 40 dB bar) does not count.
    #[test]
    fn decay_order_follows_the_resonances_shown() {
        let spectra = |modes: &[(f64, f64)]| -> Vec<Vec<Complex64>> {
            let line = |f: f64| -> Complex64 {
                let w = Complex64::new(0.0, 2.0 * std::f64::consts::PI * f);
                modes
                    .iter()
                    .map(|&(fr, a)| {
                        let wr = 2.0 * std::f64::consts::PI * fr;
                        a / (w - Complex64::new(-0.002 * wr, wr))
                    })
                    .sum()
            };
            vec![(0..4000).map(|k| line(k as f64 * 0.5)).collect()]
        };
        let order = |modes: &[(f64, f64)]| {
            let h = spectra(modes);
            let w = vec![vec![1.0; h[0].len()]];
            decay_order(&h, &w)
        };
        assert_eq!(order(&[(300.0, 1.0), (700.0, 1.0)]), 40);
        let twelve: Vec<(f64, f64)> = (0..12).map(|i| (100.0 + 150.0 * i as f64, 1.0)).collect();
        assert_eq!(order(&twelve), 4 * 12 + 16);
        let mut faint = twelve.clone();
        faint.push((1950.0, 1e-5));
        assert_eq!(order(&faint), 4 * 12 + 16);
        let many: Vec<(f64, f64)> = (0..30).map(|i| (50.0 + 64.0 * i as f64, 1.0)).collect();
        assert_eq!(order(&many), 80);
    }

    /// Hum's first eight harmonics of 50 and 60 Hz are left out of the ringing model, within the
    /// tolerance; a resonance between them, or above them, is kept.
    #[test]
    fn mains_harmonics_are_hum_not_ringing() {
        assert!(at_mains_harmonic(49.9, 0.3));
        assert!(at_mains_harmonic(180.2, 0.3));
        assert!(at_mains_harmonic(400.0, 0.3));
        assert!(!at_mains_harmonic(212.0, 0.3));
        assert!(!at_mains_harmonic(550.0, 0.3));
        assert!(!at_mains_harmonic(20.0, 0.3));
    }

    /// Twelve free decays (1.2 s at 8192 Hz) of ten modes over 50–3000 Hz, all at ζ = 0.04 %, the
    /// lowest two a split pair 1.2 % apart (291 / 294.6 Hz) with a tenth of the others'
    /// amplitude, each decay a different mix (a different station), with noise: the test's poles
    /// hold both members of the pair within 1e-4 in frequency. Weighting each line by 1/|H|
    /// merged them into one pole at 293.7 Hz with 37 times the damping, and the wide band's fit
    /// alone left their σ up to 37 % off.
    #[test]
    fn a_faint_split_pair_of_very_light_damping_is_resolved_over_a_wide_band() {
        let fs = 8192u32;
        let modes: Vec<(f64, f64)> = [291.0, 294.6, 700.0, 712.0, 1260.0, 1280.0, 1960.0]
            .into_iter()
            .chain([1990.0, 2870.0, 2905.0])
            .enumerate()
            .map(|(i, f)| (f, if i < 2 { 0.1 } else { 1.0 }))
            .collect();
        // Mode shapes along a part: sin(πm(d+0.5)/12.3), off its nodes.
        let decays = light_decays(fs, 1.2, 12345, &modes, |m, d| {
            let shape = (std::f64::consts::PI * (m + 1) as f64 * (d as f64 + 0.5) / 12.3).sin();
            (shape, 0.3 * m as f64)
        });
        let got = test_poles(&decays, fs, [50.0, 3000.0]).unwrap();
        // Measured with the narrow-band refit: σ within 3 %.
        for f in [291.0, 294.6] {
            assert_pole_found(&got, light_pole(f), 1e-4, 0.1);
        }
    }

    /// λ = −ζω + iω√(1 − ζ²) at ζ = 0.04 % (Inman, Engineering Vibration, §1.3).
    fn light_pole(f: f64) -> Complex64 {
        let w = std::f64::consts::TAU * f;
        Complex64::new(-4e-4 * w, w * (1.0 - 1.6e-7f64).sqrt())
    }

    /// Twelve free decays of `len_s` at `fs` of `modes` (frequency, amplitude) at ζ = 0.04 %,
    /// decay d of mode m scaled and phased by `shape_phase(m, d)`, with uniform noise at 1e-3 of
    /// a unit mode (a 32-bit LCG, Numerical Recipes §7.1, from `seed`).
    fn light_decays(
        fs: u32,
        len_s: f64,
        seed: u32,
        modes: &[(f64, f64)],
        shape_phase: impl Fn(usize, usize) -> (f64, f64),
    ) -> Vec<Vec<f64>> {
        let dt = 1.0 / fs as f64;
        let mut seed = seed;
        let mut noise = move || {
            seed = seed.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            1e-3 * (seed as f64 / u32::MAX as f64 - 0.5)
        };
        (0..12)
            .map(|d| {
                (0..(len_s * fs as f64) as usize)
                    .map(|k| {
                        let t = k as f64 * dt;
                        modes
                            .iter()
                            .enumerate()
                            .map(|(m, &(f, a))| {
                                let (shape, phase) = shape_phase(m, d);
                                let l = light_pole(f);
                                a * shape * (l.re * t).exp() * (l.im * t + phase).sin()
                            })
                            .sum::<f64>()
                            + noise()
                    })
                    .collect()
            })
            .collect()
    }

    /// A shaft's two bending planes 1 % apart (291.07 / 293.98 Hz, ζ = 0.04 %, the lower member
    /// a third of the upper as seen 60° from its plane) at the low end of a band to 3500 Hz,
    /// with eight more modes above. The band's z-domain fit merged the pair into one pole or
    /// missed it; the narrow-band refit around each resonance resolves it. Poles by
    /// λ = −ζω ± iω√(1 − ζ²) (Inman, Engineering Vibration, §1.3).
    #[test]
    fn a_low_split_pair_is_resolved_by_its_narrow_band() {
        let fs = 8192u32;
        let freqs = [
            291.07, 293.98, 717.5, 724.7, 1267.8, 1280.5, 1968.2, 1987.9, 2880.8, 2909.7,
        ];
        let modes: Vec<(f64, f64)> = freqs
            .iter()
            .enumerate()
            .map(|(i, &f)| (f, if i % 2 == 0 { 0.25 } else { 0.75 }))
            .collect();
        // Both planes share a shape; the pairs' shapes sin(πp(d+0.5)/12.3).
        let decays = light_decays(fs, 1.1, 777, &modes, |m, d| {
            let p = (m / 2 + 1) as f64;
            let shape = (std::f64::consts::PI * p * (d as f64 + 0.5) / 12.3).sin();
            (shape, 0.7 * d as f64)
        });
        let got = test_poles(&decays, fs, [100.0, 3500.0]).unwrap();
        // Measured: the low pair within 1e-5 in ω and 3 % in σ; the rest within 1.5e-4 and 8 %.
        for (i, f) in freqs.into_iter().enumerate() {
            let (rel_w, rel_sigma) = if i < 2 { (2e-5, 0.05) } else { (3e-4, 0.15) };
            assert_pole_found(&got, light_pole(f), rel_w, rel_sigma);
        }
    }

    /// A part that never falls silent: taps 3 s apart after a lead-in of 0.4 s (under 3 % of the
    /// recording), each tap's ringing still 2–15 % of its peak at the next. The quietest
    /// stretches are then mostly ringing; the noise floor must still come from the lead-in, or the
    /// ringing is judged too small to remove (common practice: the noise floor is what the
    /// channel shows with the part at rest).
    #[test]
    fn ringing_that_never_dies_out_is_still_found_above_the_noise() {
        let taps: Vec<usize> = (0..5)
            .map(|k| (0.4 * FS as f64) as usize + 3 * k * FS as usize)
            .collect();
        let mut x = response(&taps, taps[4] + 3 * FS as usize, None);
        let mut seed = 99u32;
        for v in &mut x {
            seed = seed.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            *v += 1e-5 * (seed as f64 / u32::MAX as f64 - 0.5);
        }
        let r = Ringing::of(&x, FS, &spans(&taps), 400, 4096);
        assert_eq!(
            r.flagged,
            [false, true, true, true, true],
            "floor {}",
            r.floor
        );
        assert!(r.floor < 1e-5, "{}", r.floor);
    }

    /// The pole of `got` nearest `l` has its ω_d within `rel_w` and its σ within `rel_sigma`.
    fn assert_pole_found(got: &[Complex64], l: Complex64, rel_w: f64, rel_sigma: f64) {
        let near = got
            .iter()
            .min_by(|a, b| (*a - l).norm().total_cmp(&(*b - l).norm()))
            .expect("no pole");
        assert!((near.im / l.im - 1.0).abs() < rel_w, "{near} vs {l}");
        assert!((near.re / l.re - 1.0).abs() < rel_sigma, "{near} vs {l}");
    }
}

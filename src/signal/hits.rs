//! Software triggering on channel A and pulse location within a record.

use crate::setup::{Slope, TriggerLevel};

/// Robust noise rms of a signal: median absolute deviation × 1.4826 (Gaussian consistency;
/// common practice). Hits are sparse in a tap recording, so the median sees the noise floor.
pub fn robust_noise_rms(x: &[f64]) -> f64 {
    if x.is_empty() {
        return 0.0;
    }
    // Subsample long files: the statistic converges long before a million samples.
    let step = (x.len() / 200_000).max(1);
    let mut v: Vec<f64> = x.iter().step_by(step).copied().collect();
    let mid = v.len() / 2;
    let med = *v.select_nth_unstable_by(mid, f64::total_cmp).1;
    for e in v.iter_mut() {
        *e = (*e - med).abs();
    }
    *v.select_nth_unstable_by(mid, f64::total_cmp).1 * 1.4826
}

/// The trigger level in full-scale units for this channel.
pub fn level_of(x: &[f64], level: TriggerLevel) -> f64 {
    match level {
        TriggerLevel::FractionOfRange(f) => f,
        TriggerLevel::NoiseMultiple(k) => k * robust_noise_rms(x),
    }
}

/// Sample indices where `x` crosses the level with the given slope, at least `holdoff` apart.
pub fn find_triggers(x: &[f64], level: f64, slope: Slope, holdoff: usize) -> Vec<usize> {
    let s = slope.sign();
    // Most of a tap recording is quiet: blocks are first tested for any sample at or beyond the
    // level (a branch-free maximum the compiler vectorises), and only those are scanned sample by
    // sample.
    const BLOCK: usize = 256;
    scan_crossings(x, level, slope, holdoff, |i| {
        let end = (i + BLOCK).min(x.len());
        let top = x[i..end].iter().fold(f64::NEG_INFINITY, |m, &v| {
            let u = s * v;
            if u > m { u } else { m }
        });
        (end, top)
    })
}

/// The scan behind [`find_triggers`]: `block(i)` gives the end of a stretch from `i` on and an
/// upper bound of s·x over it; a stretch whose bound stays below the level is skipped (a crossing
/// at i needs s·x[i] at the level, so none is missed), the others are read sample by sample.
pub(super) fn scan_crossings(
    x: &[f64],
    level: f64,
    slope: Slope,
    holdoff: usize,
    block: impl Fn(usize) -> (usize, f64),
) -> Vec<usize> {
    let s = slope.sign();
    let crosses = |i: usize| s * x[i - 1] < level && s * x[i] >= level;
    let mut out = Vec::new();
    let mut i = 1;
    while i < x.len() {
        let (end, top) = block(i);
        // NaN-safe: a NaN level is never reached.
        if top.partial_cmp(&level).is_none_or(|o| o.is_lt()) {
            i = end;
            continue;
        }
        while i < end {
            if crosses(i) {
                out.push(i);
                i = i.saturating_add(holdoff.max(1));
            } else {
                i += 1;
            }
        }
    }
    out
}

/// A force pulse located in a record (indices into the record).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pulse {
    /// First sample above 5 % of the peak.
    pub start: usize,
    /// Sample of the peak.
    pub peak: usize,
    /// First sample after the peak below 5 % of the peak.
    pub end: usize,
    /// Peak value, polarity-adjusted (positive), full-scale units.
    pub peak_value: f64,
}

impl Pulse {
    /// Width in samples (at 5 % of peak).
    pub fn width(&self) -> usize {
        (self.end - self.start).max(1)
    }
}

/// Locates the pulse that fired the trigger at `trigger` within `rec`.
/// `max_len` bounds the search for the peak (soft tips give pulses of several ms).
pub fn find_pulse(rec: &[f64], trigger: usize, sign: f64, max_len: usize) -> Pulse {
    let stop = (trigger + max_len).min(rec.len());
    let mut peak = trigger.min(rec.len().saturating_sub(1));
    let mut pv = f64::MIN;
    for (i, v) in rec.iter().enumerate().take(stop).skip(trigger) {
        if sign * v > pv {
            pv = sign * v;
            peak = i;
        }
    }
    let thr = 0.05 * pv;
    let mut start = peak;
    while start > 0 && sign * rec[start - 1] > thr {
        start -= 1;
    }
    let mut end = peak;
    while end + 1 < rec.len() && sign * rec[end] > thr {
        end += 1;
    }
    Pulse {
        start,
        peak,
        end,
        peak_value: pv,
    }
}

/// After the pulse, the first sample exceeding `fraction` of its peak: a second impact.
pub fn second_impact(rec: &[f64], pulse: &Pulse, sign: f64, fraction: f64) -> Option<usize> {
    let thr = fraction * pulse.peak_value;
    rec.iter()
        .enumerate()
        .skip(pulse.end + 1)
        .find(|(_, v)| sign * **v > thr)
        .map(|(i, _)| i)
}

/// Largest absolute sample.
#[inline]
pub fn peak_abs(x: &[f64]) -> f64 {
    // The finiteness sums go unread here, and the compiler drops them.
    peak_abs_with_finite(x, &mut [0.0; 8])
}

/// Largest absolute sample, adding `v·0` of every sample to `nan` (0 for a finite sample, NaN
/// otherwise): a channel's peak and its finiteness check in one pass. Eight running maxima with a
/// plain comparison (not `f64::max`, whose NaN rule blocks vectorising; |NaN| fails every
/// comparison, so the maxima skip it), which the compiler keeps in vector registers.
#[inline]
pub fn peak_abs_with_finite(x: &[f64], nan: &mut [f64; 8]) -> f64 {
    let mut lanes = [0.0f64; 8];
    let (eights, tail) = x.as_chunks::<8>();
    for e in eights {
        for j in 0..8 {
            let a = e[j].abs();
            lanes[j] = if a > lanes[j] { a } else { lanes[j] };
            nan[j] += e[j] * 0.0;
        }
    }
    for &v in tail {
        nan[0] += v * 0.0;
    }
    tail.iter()
        .chain(&lanes)
        .fold(0.0, |m, v| if v.abs() > m { v.abs() } else { m })
}

/// A clipped ("flat-topped") record: ≥ 3 identical samples at the record's extreme, approached by
/// a step of at least 1 % of that extreme, with the extreme above 25 % of full scale. Smooth peaks
/// of slow sinusoids can repeat a quantised value, but they approach it in tiny steps; a converter
/// that clips arrives at its limit in a jump (common practice).
pub fn flat_top(x: &[f64]) -> bool {
    flat_top_at(x, peak_abs(x))
}

/// [`flat_top`] with the record's largest absolute sample `m` already known.
pub fn flat_top_at(x: &[f64], m: f64) -> bool {
    // Whole blocks without a sample at the extreme are skipped by a vectorised test.
    const BLOCK: usize = 256;
    flat_top_scan(x, m, |i| {
        let skip = i.is_multiple_of(BLOCK)
            && i + BLOCK <= x.len()
            && !x[i..i + BLOCK]
                .iter()
                .fold(false, |hit, v| hit | (v.abs() == m));
        if skip { BLOCK } else { 0 }
    })
}

/// [`flat_top_at`] for the record `x` that starts at sample `offset` of a channel whose block
/// maxima are `peaks`: the blocks whose maximum lies below `m` are skipped unread.
pub fn flat_top_in(x: &[f64], m: f64, offset: usize, peaks: &super::taps::BlockPeaks) -> bool {
    let block = peaks.block;
    flat_top_scan(x, m, |i| {
        let g = offset + i;
        let skip = g.is_multiple_of(block)
            && i + block <= x.len()
            && peaks.max.get(g / block).is_some_and(|&b| b < m);
        if skip { block } else { 0 }
    })
}

/// The scan behind [`flat_top_at`]: `skip(i)` gives how many samples from `i` on are known to
/// hold no sample at the extreme (0: look at sample `i`).
fn flat_top_scan(x: &[f64], m: f64, skip: impl Fn(usize) -> usize) -> bool {
    if m < 0.25 {
        return false;
    }
    let mut i = 0;
    while i < x.len() {
        let k = skip(i);
        if k > 0 {
            i += k;
            continue;
        }
        if x[i].abs() == m {
            let s = i;
            while i < x.len() && x[i] == x[s] {
                i += 1;
            }
            let run = i - s;
            // How fast the signal approached the plateau: a clipped wave was moving fast one or
            // two samples before; a smooth, quantised crest creeps up by a quantum or so.
            let d = |k: usize| {
                if s >= k {
                    (x[s + 1 - k] - x[s - k]).abs()
                } else {
                    m
                }
            };
            let step = d(1).max(d(2));
            if run >= 3 && step >= 0.01 * m {
                return true;
            }
        } else {
            i += 1;
        }
    }
    false
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The block-skipping scan finds exactly the crossings of a sample-by-sample scan, also at
    /// block edges and with NaN samples (common practice: a trigger is the first sample at or
    /// past the level after one below it).
    #[test]
    fn block_scan_matches_a_plain_scan() {
        let plain = |x: &[f64], level: f64, s: f64, hold: usize| {
            let mut out = Vec::new();
            let mut i = 1;
            while i < x.len() {
                if s * x[i - 1] < level && s * x[i] >= level {
                    out.push(i);
                    i += hold.max(1);
                } else {
                    i += 1;
                }
            }
            out
        };
        let mut x: Vec<f64> = (0..5000)
            .map(|i| ((i * 7919) % 1000) as f64 / 1000.0 - 0.5)
            .map(|v: f64| v * 0.1)
            .collect();
        for &k in &[255usize, 256, 257, 511, 512, 1023, 4096, 4999] {
            x[k] = 0.9;
            x[k - 1] = 0.0;
        }
        x[3000] = f64::NAN;
        x[3001] = 0.95;
        for (slope, s) in [(Slope::Rising, 1.0), (Slope::Falling, -1.0)] {
            for hold in [1, 3, 200] {
                assert_eq!(find_triggers(&x, 0.5, slope, hold), plain(&x, 0.5, s, hold));
            }
        }
    }

    #[test]
    fn triggers_respect_holdoff_and_slope() {
        let mut x = vec![0.0; 1000];
        x[100] = 0.5;
        x[101] = 0.2;
        x[105] = 0.5; // within hold-off: ringing, not a new hit
        x[600] = 0.5;
        assert_eq!(find_triggers(&x, 0.1, Slope::Rising, 200), vec![100, 600]);
        let neg: Vec<f64> = x.iter().map(|v| -v).collect();
        assert_eq!(
            find_triggers(&neg, 0.1, Slope::Falling, 200),
            vec![100, 600]
        );
        assert!(find_triggers(&neg, 0.1, Slope::Rising, 200).is_empty());
    }

    #[test]
    fn noise_rms_of_gaussian_like_signal() {
        // A uniform distribution on [-a, a] has MAD a/2, so the estimate is 1.4826·a/2 (exact).
        let x: Vec<f64> = (0..10001)
            .map(|i| (i as f64 / 10000.0) * 2.0 - 1.0)
            .collect();
        assert!((robust_noise_rms(&x) - 0.7413).abs() < 1e-3);
    }

    #[test]
    fn flat_top_detects_clipping_not_slow_sines() {
        let clipped: Vec<f64> = (0..200)
            .map(|i| (1.3 * (i as f64 * 0.05).sin()).clamp(-0.9, 0.9))
            .collect();
        assert!(flat_top(&clipped));
        // A slow sine quantised to 16 bits repeats its peak value but is not clipped.
        let slow: Vec<f64> = (0..20000)
            .map(|i| ((0.5 * (i as f64 * 2e-4).sin()) * 32768.0).round() / 32768.0)
            .collect();
        assert!(!flat_top(&slow));
    }
}

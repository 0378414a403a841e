//! Where the taps are in a recording, and a record length that fits between them.
//!
//! A tap ("strike") is what the technician does once: the hammer's first impact and any rebound
//! impacts milliseconds later. Taps are found by their onsets — a level crossing where the signal
//! jumps well above what it did just before — so ringing that keeps crossing the trigger level
//! (a reference accelerometer in the roving-sensor layout, a lightly damped part) is never taken
//! for a new tap, and a next tap a second later is never taken for a rebound.

use crate::setup::Slope;

/// Impacts closer than this to the previous one belong to the same tap (a rebound or a stutter);
/// nobody taps a part more than a few times a second on purpose (common practice).
pub const STRIKE_GAP_S: f64 = 0.15;

/// An onset must rise this many times above the largest value of the preceding 100 ms.
const ONSET_RATIO: f64 = 2.0;

/// Maxima of |x| over 1 ms blocks, and whether every sample is finite: one pass over a
/// channel that the tap search and the damaged-sample check share.
pub struct BlockPeaks {
    /// Samples per block (the last may be shorter).
    pub block: usize,
    /// Largest |x| of each block (non-finite samples do not count).
    pub max: Vec<f64>,
    /// Whether every sample is finite.
    pub finite: bool,
}

impl BlockPeaks {
    /// The block maxima of `x` sampled at `fs`.
    pub fn of(x: &[f64], fs: u32) -> Self {
        let block = ((fs.max(1) as f64 * 1e-3) as usize).max(1);
        // x·0 is 0 for every finite sample and NaN otherwise: a sum the compiler vectorises
        // alongside the maxima, in the same pass, with no branch per sample.
        let mut nan = [0.0f64; 8];
        let max = x
            .chunks(block)
            .map(|c| super::hits::peak_abs_with_finite(c, &mut nan))
            .collect();
        Self {
            block,
            max,
            finite: nan.iter().sum::<f64>() == 0.0,
        }
    }
}

impl BlockPeaks {
    /// The largest |x| over `x[from..to]` (`x` the channel these are the block maxima of):
    /// whole blocks are read from the maxima, only the partial ones at the ends from `x`.
    pub fn peak_in(&self, x: &[f64], from: usize, to: usize) -> f64 {
        let (b0, b1) = (from.div_ceil(self.block), to / self.block);
        if b0 >= b1 {
            return super::hits::peak_abs(&x[from..to]);
        }
        let whole = self.max[b0..b1]
            .iter()
            .fold(0.0f64, |m, &v| if v > m { v } else { m });
        let head = super::hits::peak_abs(&x[from..b0 * self.block]);
        let tail = super::hits::peak_abs(&x[b1 * self.block..to]);
        whole.max(head).max(tail)
    }
}

/// Trigger samples of the taps in `x`: the first level crossing of each tap.
pub fn find_strikes(x: &[f64], level: f64, slope: Slope, fs: u32) -> Vec<usize> {
    find_strikes_in(x, &BlockPeaks::of(x, fs), level, slope, fs)
}

/// [`find_strikes`] with the channel's block maxima already taken (`peaks` of `x` at `fs`).
pub fn find_strikes_in(
    x: &[f64],
    peaks: &BlockPeaks,
    level: f64,
    slope: Slope,
    fs: u32,
) -> Vec<usize> {
    if x.is_empty() || !level.is_finite() || level <= 0.0 {
        return Vec::new();
    }
    let fs = fs.max(1) as f64;
    let (block, bmax) = (peaks.block, &peaks.max);
    let span_max = |from: usize, to: usize| -> f64 {
        // Maximum over whole blocks overlapping [from, to).
        if to <= from {
            return 0.0;
        }
        let (b0, b1) = (from / block, (to - 1) / block);
        bmax[b0..=b1.min(bmax.len() - 1)]
            .iter()
            .fold(0.0f64, |m, &v| m.max(v))
    };
    let holdoff = ((5e-3 * fs) as usize).max(1);
    let look_back = (0.1 * fs) as usize;
    let quiet_gap = (3e-3 * fs) as usize + block;
    let gap = (STRIKE_GAP_S * fs) as usize;
    let mut strikes: Vec<usize> = Vec::new();
    let mut last_onset: Option<usize> = None;
    for t in triggers_in(x, peaks, level, slope, holdoff) {
        let after = span_max(t, (t + holdoff).min(x.len()));
        let before = span_max(t.saturating_sub(look_back), t.saturating_sub(quiet_gap));
        let onset = after > ONSET_RATIO * before;
        if !onset {
            continue;
        }
        if last_onset.is_none_or(|p| t - p >= gap) {
            strikes.push(t);
        }
        last_onset = Some(t);
    }
    strikes
}

/// [`super::hits::find_triggers`], skipping the blocks whose largest |x| stays below the level
/// (a crossing at i needs s·x[i] ≥ level, and |x| ≥ s·x): the same crossings, without a second
/// pass over the channel.
fn triggers_in(
    x: &[f64],
    peaks: &BlockPeaks,
    level: f64,
    slope: Slope,
    holdoff: usize,
) -> Vec<usize> {
    let block = peaks.block;
    super::hits::scan_crossings(x, level, slope, holdoff, |i| {
        let b = i / block;
        let top = peaks.max.get(b).copied().unwrap_or(f64::NAN);
        (((b + 1) * block).min(x.len()), top)
    })
}

/// The time between successive taps that the record must fit: the shortest spacing that is not
/// an outlier (at least 0.8 × the median), so one hurried tap does not shorten every record of the
/// test while the ordinary spread of a person's rhythm costs no hit. `None` with fewer than two
/// taps.
pub fn typical_short_spacing(spacings_samples: &[usize]) -> Option<usize> {
    if spacings_samples.is_empty() {
        return None;
    }
    let mut v = spacings_samples.to_vec();
    v.sort_unstable();
    let median = v[v.len() / 2] as f64;
    v.into_iter().find(|&s| s as f64 >= 0.8 * median)
}

/// The record length for taps `spacing` samples apart: the default length when it fits,
/// otherwise the longest length with only factors 2, 3 and 5 (fast FFTs) whose post-trigger part
/// ends 5 ms before the next tap. Never below 1024 samples.
pub fn record_for_spacing(
    default_n: usize,
    spacing: usize,
    pretrigger_fraction: f64,
    fs: u32,
) -> usize {
    let guard = (5e-3 * fs as f64) as usize;
    let post = spacing.saturating_sub(guard) as f64;
    let max_n = (post / (1.0 - pretrigger_fraction).max(0.1)).floor() as usize;
    if default_n <= max_n {
        return default_n;
    }
    // 1024 is itself 2·3·5-smooth, so the record never falls below it.
    super::frf::smooth_len_at_most(max_n.max(1024)) & !1
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pulse_at(x: &mut [f64], at: usize, peak: f64) {
        for k in 0..12 {
            x[at + k] += peak * (std::f64::consts::PI * k as f64 / 12.0).sin();
        }
    }

    /// A clipped, noisy tap recording: decaying bursts, a converter limit at ±0.6, a few
    /// quantised crests (pseudo-random, fixed seed).
    fn busy_channel(len: usize, seed: u64) -> Vec<f64> {
        let mut state = seed;
        let mut rnd = move || {
            state = state
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        (0..len)
            .map(|i| {
                let t = (i % 7000) as f64;
                let v = 1.4 * (-(t / 900.0)).exp() * (0.07 * i as f64).sin() + 0.01 * rnd();
                (v.clamp(-0.6, 0.6) * 4096.0).round() / 4096.0
            })
            .collect()
    }

    /// The block maxima give the same peaks, crossings and clipping verdicts as a plain scan of
    /// the samples (common practice: a maximum is exact whatever the grouping), at every offset
    /// and length, including records that start and end inside a block.
    #[test]
    fn block_maxima_agree_with_plain_scans() {
        for (fs, seed) in [(48_000u32, 1u64), (44_100, 2), (8_000, 3), (1_000, 4)] {
            let x = busy_channel(40_000, seed);
            let peaks = BlockPeaks::of(&x, fs);
            assert!(peaks.finite);
            assert!(super::super::hits::flat_top(&x), "the channel clips");
            for (from, len) in [(0, 40_000), (1, 5), (47, 4097), (3333, 7000), (39_990, 10)] {
                let to = from + len;
                let rec = &x[from..to];
                let plain = super::super::hits::peak_abs(rec);
                assert_eq!(peaks.peak_in(&x, from, to), plain, "fs {fs} [{from}, {to})");
                assert_eq!(
                    super::super::hits::flat_top_in(rec, plain, from, &peaks),
                    super::super::hits::flat_top_at(rec, plain),
                    "fs {fs} [{from}, {to})"
                );
            }
            for level in [0.05, 0.3, 0.59, 0.6, 0.61] {
                for slope in [Slope::Rising, Slope::Falling] {
                    assert_eq!(
                        triggers_in(&x, &peaks, level, slope, 17),
                        super::super::hits::find_triggers(&x, level, slope, 17)
                    );
                }
            }
        }
        let mut bad = busy_channel(5000, 9);
        bad[4321] = f64::NAN;
        assert!(!BlockPeaks::of(&bad, 48_000).finite);
        bad[4321] = f64::NEG_INFINITY;
        assert!(!BlockPeaks::of(&bad, 48_000).finite);
    }

    #[test]
    fn rebound_joins_its_tap_and_ringing_is_not_a_tap() {
        let fs = 10_000;
        let mut x = vec![0.0; 30_000];
        pulse_at(&mut x, 1000, 0.5);
        pulse_at(&mut x, 1030, 0.2); // rebound 3 ms later: same tap
        pulse_at(&mut x, 13_000, 0.5); // 1.2 s later: next tap
        // Ringing that crosses the level for a long time after the third tap.
        for (i, v) in x.iter_mut().enumerate().skip(20_000) {
            *v += 0.3 * (0.05 * i as f64).sin() * (-(i as f64 - 20_000.0) / 5000.0).exp();
        }
        pulse_at(&mut x, 20_000, 0.6);
        let s = find_strikes(&x, 0.05, Slope::Rising, fs);
        assert_eq!(s.len(), 3, "{s:?}");
        assert!(s[0] >= 1000 && s[0] < 1005);
        assert!(s[1] >= 13_000 && s[1] < 13_005);
    }

    #[test]
    fn record_fits_between_taps() {
        // 1.2 s spacing at 48 kHz with 10 % pretrigger: post-trigger part ≤ 1.195 s.
        let n = record_for_spacing(65_536, 57_600, 0.1, 48_000);
        assert_eq!(crate::signal::frf::smooth_len_at_most(n), n);
        assert!((n as f64 * 0.9) <= 57_600.0 - 240.0);
        assert!(n > 60_000, "{n}");
        assert_eq!(record_for_spacing(65_536, 96_000, 0.1, 48_000), 65_536);
    }
}

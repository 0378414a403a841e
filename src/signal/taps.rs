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
        // alongside the maxima, with no branch per sample.
        let mut nan = 0.0;
        let max = x
            .chunks(block)
            .map(|c| {
                nan += crate::numeric::lane_sum(c, |v| v * 0.0);
                super::hits::peak_abs(c)
            })
            .collect();
        Self {
            block,
            max,
            finite: nan == 0.0,
        }
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
    let s = slope.sign();
    let crosses = |i: usize| s * x[i - 1] < level && s * x[i] >= level;
    let block = peaks.block;
    let mut out = Vec::new();
    let mut i = 1;
    while i < x.len() {
        let b = i / block;
        let end = ((b + 1) * block).min(x.len());
        // NaN-safe: a NaN level is never reached.
        if peaks
            .max
            .get(b)
            .is_none_or(|m| m.partial_cmp(&level).is_none_or(|o| o.is_lt()))
        {
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

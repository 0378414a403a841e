//! Once-per-revolution (or n-per-revolution) tach pulses to revolution start times.
//!
//! Rising crossings with hysteresis and sub-sample interpolation (rotor-notes §C2), thresholds
//! set per quarter second from the local pulse height (a magnetic pickup's pulses grow with
//! speed; an AC-coupled input droops and undershoots), either polarity, and the pulse train
//! cleaned of missing and extra pulses against the local period (each one flagged).

/// Revolutions found in a tach channel.
#[derive(Debug, Clone, PartialEq)]
pub struct Revolutions {
    /// Start time of each revolution (the reference edge), s; ascending.
    pub start_s: Vec<f64>,
    /// The pulses were negative-going (the channel was inverted to read them).
    pub inverted: bool,
    /// Pulses inserted where one was missing (count).
    pub inserted: usize,
    /// Pulses dropped as extra (count).
    pub dropped: usize,
    /// What a person should know.
    pub warnings: Vec<String>,
}

fn quantile(sorted: &[f64], q: f64) -> f64 {
    let i = ((sorted.len() - 1) as f64 * q).round() as usize;
    sorted[i.min(sorted.len() - 1)]
}

/// Finds the revolutions of `x` (sampled at `fs` Hz) with `per_rev` pulses per revolution.
/// `Err` with a sentence when the channel holds no pulse train.
pub fn revolutions(x: &[f64], fs: f64, per_rev: usize) -> Result<Revolutions, String> {
    let per_rev = per_rev.max(1);
    if x.len() < 16 || fs.is_nan() || fs <= 0.0 {
        return Err("the recording is too short to hold tach pulses".into());
    }
    let mut sorted: Vec<f64> = x.iter().copied().filter(|v| v.is_finite()).collect();
    if sorted.len() < x.len() / 2 {
        return Err("the tach channel is mostly not numbers".into());
    }
    sorted.sort_by(f64::total_cmp);
    let median = quantile(&sorted, 0.5);
    // The few most extreme samples (pulses are short): the k-th largest, robust to a spike.
    let k = (sorted.len() / 20_000).max(3).min(sorted.len() - 1);
    let top = sorted[sorted.len() - 1 - k] - median;
    let bottom = median - sorted[k];
    let inverted = bottom > top;
    let sign = if inverted { -1.0 } else { 1.0 };
    // Noise from sample-to-sample differences: a pulse train's levels (wide pulses, a high duty
    // cycle) would count as noise in the spread about the median, its edges are few.
    let mut dev: Vec<f64> = x.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
    dev.sort_by(f64::total_cmp);
    let noise = 1.4826 * quantile(&dev, 0.5) / std::f64::consts::SQRT_2;
    let height = top.max(bottom);
    if !(height > 1e-6 && height > 8.0 * noise) {
        return Err(format!(
            "no tach pulses found (largest excursion {:.2e} of full scale against noise {:.2e}): \
             a silent channel, or the wrong one",
            height, noise
        ));
    }
    // Local pulse height per block of a quarter second (and its neighbours).
    let block = ((0.25 * fs) as usize).max(8);
    let nb = x.len().div_ceil(block);
    let block_peak: Vec<f64> = (0..nb)
        .map(|b| {
            x[b * block..((b + 1) * block).min(x.len())]
                .iter()
                .map(|v| sign * (v - median))
                .fold(0.0f64, f64::max)
        })
        .collect();
    // A block's own pulses set its thresholds; half its neighbours' keeps a block without a
    // pulse (slow roll, or noise) from reading noise as edges.
    let local = |b: usize| {
        let lo = b.saturating_sub(1);
        let hi = (b + 1).min(nb - 1);
        let near = block_peak[lo..=hi].iter().copied().fold(0.0f64, f64::max);
        block_peak[b].max(0.5 * near)
    };
    let mut edges = Vec::new();
    let mut armed = false;
    let mut prev = sign * (x[0] - median);
    for (i, v) in x.iter().enumerate().skip(1) {
        let y = sign * (v - median);
        let p = local(i / block);
        // A block without a pulse clearly above the noise has no edge.
        if p < 8.0 * noise || p < 0.05 * height {
            armed = false;
            prev = y;
            continue;
        }
        let (hi, lo) = (0.5 * p, 0.25 * p);
        if !armed && y < lo {
            armed = true;
        } else if armed && prev < hi && y >= hi {
            let frac = if y != prev {
                (hi - prev) / (y - prev)
            } else {
                0.0
            };
            edges.push((i as f64 - 1.0 + frac) / fs);
            armed = false;
        }
        prev = y;
    }
    let mut warnings = Vec::new();
    if edges.len() < 3 * per_rev + 1 {
        return Err(format!(
            "only {} tach pulses found: at least {} are needed (three revolutions)",
            edges.len(),
            3 * per_rev + 1
        ));
    }
    // Clean the train against the local pulse interval: a gap of about n intervals is n − 1
    // missing pulses (put back by interpolation); an interval under half the local one is an
    // extra pulse (dropped).
    let (mut inserted, mut dropped) = (0usize, 0usize);
    let mut clean: Vec<f64> = vec![edges[0]];
    for (j, &t) in edges.iter().enumerate().skip(1) {
        let lo = j.saturating_sub(6);
        let hi = (j + 6).min(edges.len() - 1);
        let mut gaps: Vec<f64> = edges[lo..=hi].windows(2).map(|w| w[1] - w[0]).collect();
        gaps.sort_by(f64::total_cmp);
        let typical = gaps[gaps.len() / 2];
        let last = *clean.last().expect("one edge");
        let gap = t - last;
        if gap < 0.5 * typical {
            dropped += 1;
            continue;
        }
        let n = (gap / typical).round();
        if n >= 2.0 && gap > 1.5 * typical {
            for k in 1..n as usize {
                clean.push(last + gap * k as f64 / n);
            }
            inserted += n as usize - 1;
        }
        clean.push(t);
    }
    let pulses = clean.len();
    if 10 * (inserted + dropped) > pulses {
        return Err(format!(
            "the tach pulses are irregular: {inserted} missing and {dropped} extra among {pulses}; \
             check --pulses-per-rev, the channel and the pickup"
        ));
    }
    if inserted > 0 {
        warnings.push(format!(
            "{inserted} tach pulse(s) missing: put back by interpolation"
        ));
    }
    if dropped > 0 {
        warnings.push(format!("{dropped} extra tach pulse(s) dropped"));
    }
    if inverted {
        warnings.push("the tach pulses are negative-going: read inverted".into());
    }
    let start_s: Vec<f64> = clean.iter().copied().step_by(per_rev).collect();
    Ok(Revolutions {
        start_s,
        inverted,
        inserted,
        dropped,
        warnings,
    })
}

//! What a tracked run says: critical speeds with their amplification factor (half-power and
//! phase-slope methods, rotor-notes §C6), and subsynchronous components (§C7).

use serde::Serialize;

use super::track::{OrderPoint, OrderSpectrum, unwrapped_lags};
use crate::Complex64;

/// A critical speed read from one order's Bode data.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CriticalSpeed {
    /// Speed of the amplitude peak (parabolic refinement), rpm.
    pub speed_rpm: f64,
    /// N_c/(N2 − N1) by the half-power points (API RP 684 rule; verify against your edition).
    pub amplification_factor: f64,
    /// Change of the phase lag through the resonance (from 3 half-power widths below to 3
    /// above, or the ends of the data), degrees.
    pub phase_change_deg: f64,
    /// The order whose amplitude peaks.
    pub order: u32,
    /// Lower and upper half-power speeds, rpm.
    pub n1_rpm: f64,
    /// Upper half-power speed, rpm.
    pub n2_rpm: f64,
    /// Peak amplitude (0-peak, SI units of the quantity, slow roll removed).
    pub peak_amplitude: f64,
    /// N_90/(N_135 − N_45) from the phase lag relative to below the resonance (`None` when the
    /// lag does not pass all three).
    pub amplification_factor_phase: Option<f64>,
    /// Sweep rate against the mode's bandwidth, Ω̇/(ζω_n)² (≲ 0.1 for a fair AF).
    pub sweep_parameter: f64,
}

/// A subsynchronous component.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Subsynchronous {
    /// Order (fraction of running speed).
    pub order: f64,
    /// Lowest speed where it was found, rpm.
    pub from_rpm: f64,
    /// Highest speed where it was found, rpm.
    pub to_rpm: f64,
    /// Largest amplitude (0-peak, the recorded quantity in SI units: m/s² for an
    /// accelerometer).
    pub peak_amplitude: f64,
}

/// One order's Bode data: speeds (ascending), vectors averaged over neighbouring revolutions
/// (vector mean over a window spanning at most 0.3 % of speed), their standard errors, and the
/// time of each point.
pub struct Bode {
    /// Speeds, rpm, ascending.
    pub speeds: Vec<f64>,
    /// Mean vectors.
    pub vectors: Vec<Complex64>,
    /// Standard error of each mean vector (same units).
    pub errors: Vec<f64>,
    /// Times, s.
    pub times: Vec<f64>,
}

/// The Bode data of one order's points.
pub fn bode(points: &[OrderPoint]) -> Bode {
    let mut p: Vec<OrderPoint> = points.to_vec();
    p.sort_by(|a, b| a.speed_rpm.total_cmp(&b.speed_rpm));
    let n = p.len();
    let mut speeds = Vec::with_capacity(n);
    let mut vecs = Vec::with_capacity(n);
    let mut times = Vec::with_capacity(n);
    let mut errors = Vec::with_capacity(n);
    for i in 0..n {
        let s = p[i].speed_rpm;
        let (mut lo, mut hi) = (i, i);
        while lo > 0 && i - lo < 30 && (s - p[lo - 1].speed_rpm).abs() < 0.0015 * s {
            lo -= 1;
        }
        while hi + 1 < n && hi - i < 30 && (p[hi + 1].speed_rpm - s).abs() < 0.0015 * s {
            hi += 1;
        }
        let m = (hi - lo + 1) as f64;
        speeds.push(p[lo..=hi].iter().map(|q| q.speed_rpm).sum::<f64>() / m);
        let mean = p[lo..=hi].iter().map(|q| q.vector).sum::<Complex64>() / m;
        // Scatter of single revolutions from their second differences over a neighbourhood:
        // blind to the smooth turn of the vector through a resonance, which a scatter about
        // the mean would count as noise (E|Δ²v|² = 6σ² for independent noise).
        let (a, b) = (
            i.saturating_sub(5).max(lo.min(i.saturating_sub(1))),
            (i + 5).min(n - 1),
        );
        let var = if b >= a + 2 {
            (a + 1..b)
                .map(|j| (p[j + 1].vector - p[j].vector * 2.0 + p[j - 1].vector).norm_sqr())
                .sum::<f64>()
                / (6.0 * (b - a - 1) as f64)
        } else {
            0.0
        };
        errors.push((var / m).sqrt());
        vecs.push(mean);
        times.push(p[i].time_s);
    }
    Bode {
        speeds,
        vectors: vecs,
        errors,
        times,
    }
}

/// The lag of one order where its averaged vector stands five standard errors clear of its
/// scatter (the phase of noise says nothing): stretches of (speed rpm, lag degrees), each
/// unwrapped on its own, of two points or more.
pub fn confident_lags(points: &[OrderPoint]) -> Vec<Vec<[f64; 2]>> {
    let b = bode(points);
    let mut out = Vec::new();
    let mut seg: Vec<(f64, Complex64)> = Vec::new();
    let mut flush = |seg: &mut Vec<(f64, Complex64)>| {
        if seg.len() > 1 {
            let l = unwrapped_lags(&seg.iter().map(|q| q.1).collect::<Vec<_>>());
            out.push(seg.iter().zip(l).map(|(q, l)| [q.0, l]).collect());
        }
        seg.clear();
    };
    for ((s, v), e) in b.speeds.iter().zip(&b.vectors).zip(&b.errors) {
        if v.norm() > 5.0 * e && v.norm() > 0.0 {
            seg.push((*s, *v));
        } else {
            flush(&mut seg);
        }
    }
    flush(&mut seg);
    out
}

/// Slow roll: the mean vector over the lowest 5 % of the speed range, when that is under a
/// fifth of the top speed (below there the unbalance response is small against runout).
pub fn slow_roll(speeds: &[f64], vecs: &[Complex64]) -> Option<Complex64> {
    let (lo, hi) = (*speeds.first()?, *speeds.last()?);
    if lo >= 0.2 * hi || lo.is_nan() {
        return None;
    }
    let edge = lo + 0.05 * (hi - lo);
    let sel: Vec<Complex64> = speeds
        .iter()
        .zip(vecs)
        .filter(|(s, _)| **s <= edge)
        .map(|(_, v)| *v)
        .collect();
    (!sel.is_empty()).then(|| sel.iter().sum::<Complex64>() / sel.len() as f64)
}

/// Critical speeds of one order: amplitude peaks standing well above the order's typical level,
/// falling to half power on both sides, with the lag turning by at least 100° through them.
pub fn criticals(order: u32, points: &[OrderPoint]) -> Vec<CriticalSpeed> {
    let Bode {
        speeds,
        vectors: mut vecs,
        errors,
        times,
    } = bode(points);
    if speeds.len() < 9 {
        return Vec::new();
    }
    if let Some(sr) = slow_roll(&speeds, &vecs) {
        vecs.iter_mut().for_each(|v| *v -= sr);
    }
    let amp: Vec<f64> = vecs.iter().map(|v| v.norm()).collect();
    let lags = unwrapped_lags(&vecs);
    let n = amp.len();
    // The order's typical level around a speed (half to one and a half times it): a rotor's
    // first critical stands above its surroundings even where a larger second one, or the
    // rise of acceleration with speed, dominates the run as a whole.
    let typical_near = |s: f64| -> f64 {
        let mut near: Vec<f64> = (0..n)
            .filter(|&j| speeds[j] >= 0.5 * s && speeds[j] <= 1.5 * s)
            .map(|j| amp[j])
            .collect();
        near.sort_by(f64::total_cmp);
        near.get(near.len() / 2).copied().unwrap_or(0.0)
    };
    let mut out: Vec<CriticalSpeed> = Vec::new();
    // Candidates: local maxima over ±1 % of speed, largest first.
    let mut cands: Vec<usize> = (1..n - 1)
        .filter(|&i| {
            let s = speeds[i];
            (0..n)
                .filter(|&j| (speeds[j] - s).abs() <= 0.01 * s)
                .all(|j| amp[j] <= amp[i])
        })
        .collect();
    cands.sort_by(|a, b| amp[*b].total_cmp(&amp[*a]));
    for i in cands {
        let a = amp[i];
        // A resonance stands well above the order's typical level and far above the scatter of
        // the revolutions it is averaged from (noise alone makes peaks too).
        if a < 1.5 * typical_near(speeds[i]) || a < 10.0 * errors[i] {
            continue;
        }
        let (Some(n1), Some(n2)) = crate::numeric::half_power_points(&speeds, &amp, i) else {
            continue;
        };
        if n2 <= n1 {
            continue;
        }
        let nc = crate::numeric::parabolic_peak(
            [speeds[i - 1], speeds[i], speeds[i + 1]],
            [amp[i - 1], a, amp[i + 1]],
        )
        .map_or(speeds[i], |p| p.0);
        let width = n2 - n1;
        // The lag's turn: from 2.5 half-power widths below to 2.5 above (r = 1 ± 5ζ, where one
        // mode has turned 157° of its 180°), but not past an antiresonance (the amplitude's
        // least value on either side), where a neighbouring mode turns it back.
        let k_nc = speeds.partition_point(|s| *s < nc).min(n - 1);
        let k_lo = speeds.partition_point(|s| *s < nc - 2.5 * width);
        let k_hi = speeds.partition_point(|s| *s <= nc + 2.5 * width).min(n);
        let k_lo = (k_lo..=k_nc)
            .min_by(|a, b| amp[*a].total_cmp(&amp[*b]))
            .unwrap_or(k_lo);
        let k_hi = (k_nc..k_hi.max(k_nc + 1))
            .min_by(|a, b| amp[*a].total_cmp(&amp[*b]))
            .unwrap_or(k_nc);
        let lag_range = |a: usize, b: usize| {
            lags[a..=b.max(a)]
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &l| {
                    (lo.min(l), hi.max(l))
                })
        };
        let turn_over = |k_hi: usize| {
            let (below_min, below_max) = lag_range(k_lo, k_nc);
            let (above_min, above_max) = lag_range(k_nc, k_hi);
            if above_max - below_min >= below_max - above_min {
                (above_max - below_min, below_min)
            } else {
                (above_min - below_max, below_max)
            }
        };
        let (mut change, lag_lo) = turn_over(k_hi);
        // Swept fast, a lightly damped rotor rings on at its own frequency after the peak and
        // the lag keeps turning with the beat; the turn up to the upper half-power point (about
        // 125° for one mode) is free of it.
        if change.abs() > 270.0 {
            let k_n2 = speeds.partition_point(|s| *s <= n2).clamp(k_nc, n - 1);
            let (c2, _) = turn_over(k_n2);
            if (100.0..=270.0).contains(&c2.abs()) {
                change = c2;
            }
        }
        let (below, above) = (speeds[k_lo], speeds[k_hi]);
        // The phase-slope AF measures the turn from the lag well below the resonance (its
        // quietest point down to half its speed: slow roll, or the antiresonance before it).
        let k_half = speeds.partition_point(|s| *s < 0.5 * nc).min(k_nc);
        let k_ref = (k_half..=k_nc)
            .min_by(|a, b| amp[*a].total_cmp(&amp[*b]))
            .unwrap_or(k_half);
        let (ref_min, ref_max) = lag_range(k_ref, k_nc);
        let lag_ref = if change >= 0.0 { ref_min } else { ref_max };
        // One mode turns the lag by up to 180° (a little more with its neighbours); a random
        // walk of a noisy phase turns it anywhere.
        if !(100.0..=270.0).contains(&change.abs()) {
            continue;
        }
        if out.iter().any(|c| (c.speed_rpm - nc).abs() < 2.0 * width) {
            continue;
        }
        // Phase slope: speeds where the lag has turned 45°, 90° and 135° from below.
        let sgn = change.signum();
        let _ = lag_lo;
        let turn = |deg: f64| -> Option<f64> {
            let target = lag_ref + sgn * deg;
            let k0 = speeds.partition_point(|s| *s < speeds[k_ref].min(below));
            let k1 = speeds.partition_point(|s| *s <= above);
            (k0.max(1)..k1)
                .find(|&k| (lags[k - 1] - target) * (lags[k] - target) <= 0.0)
                .map(|k| {
                    let (l0, l1) = (lags[k - 1], lags[k]);
                    if l1 == l0 {
                        speeds[k]
                    } else {
                        speeds[k - 1] + (target - l0) * (speeds[k] - speeds[k - 1]) / (l1 - l0)
                    }
                })
        };
        let af_phase = match (turn(45.0), turn(90.0), turn(135.0)) {
            (Some(a45), Some(a90), Some(a135)) if a135 > a45 => Some(a90 / (a135 - a45)),
            _ => None,
        };
        // Sweep rate near the peak: dΩ/dt from the time of the neighbouring points.
        let (ja, jb) = (i.saturating_sub(5), (i + 5).min(n - 1));
        let dt = (times[jb] - times[ja]).abs();
        let domega = (speeds[jb] - speeds[ja]).abs() * std::f64::consts::PI / 30.0;
        let af = nc / width;
        let zeta = 0.5 / af;
        let wn = nc * std::f64::consts::PI / 30.0;
        let sweep = if dt > 0.0 {
            domega / dt / (zeta * wn).powi(2)
        } else {
            0.0
        };
        out.push(CriticalSpeed {
            speed_rpm: nc,
            amplification_factor: af,
            phase_change_deg: change.abs(),
            order,
            n1_rpm: n1,
            n2_rpm: n2,
            peak_amplitude: a,
            amplification_factor_phase: af_phase,
            sweep_parameter: sweep,
        });
    }
    out.sort_by(|a, b| a.speed_rpm.total_cmp(&b.speed_rpm));
    out
}

/// Subsynchronous components: in each block's order spectrum the largest line between 0.2× and
/// 0.85× (clear of the 1× line's main lobe) that is a local maximum standing 5× above the band's
/// median and above 1 % of the 1× line (after rotor-notes §C7,
/// which asks 10 % of 1×: a whirl near a resonance is small against the 1× there, and the
/// median test already rejects noise), in three or more consecutive blocks (the notes ask two;
/// noise alone passed two in our noisiest simulated run).
pub fn subsynchronous(spectra: &[OrderSpectrum]) -> Vec<Subsynchronous> {
    let mut flags: Vec<Option<(f64, f64, f64)>> = Vec::with_capacity(spectra.len());
    for s in spectra {
        let band: Vec<usize> = (0..s.orders.len())
            .filter(|&j| (0.2..=0.85).contains(&s.orders[j]))
            .collect();
        if band.len() < 5 {
            flags.push(None);
            continue;
        }
        let mut vals: Vec<f64> = band.iter().map(|&j| s.amplitude[j]).collect();
        vals.sort_by(f64::total_cmp);
        let median = vals[vals.len() / 2];
        let &jmax = band
            .iter()
            .max_by(|a, b| s.amplitude[**a].total_cmp(&s.amplitude[**b]))
            .expect("band has lines");
        let one = s
            .orders
            .iter()
            .position(|o| (o - 1.0).abs() < 1e-9)
            .map_or(0.0, |j| s.amplitude[j]);
        let peak = s.amplitude[jmax];
        let local_max = jmax > 0
            && jmax + 1 < s.amplitude.len()
            && peak > s.amplitude[jmax - 1]
            && peak >= s.amplitude[jmax + 1];
        if peak > 5.0 * median && peak > 0.01 * one && local_max {
            // Parabola through the log amplitudes (Hann main lobe ≈ Gaussian).
            let (a, b, c) = (
                s.amplitude[jmax - 1].max(1e-300).ln(),
                peak.max(1e-300).ln(),
                s.amplitude[jmax + 1].max(1e-300).ln(),
            );
            let d = a - 2.0 * b + c;
            let shift = if d < 0.0 { 0.5 * (a - c) / d } else { 0.0 };
            let step = s.orders[1] - s.orders[0];
            flags.push(Some((s.orders[jmax] + shift * step, s.speed_rpm, peak)));
        } else {
            flags.push(None);
        }
    }
    let mut out: Vec<Subsynchronous> = Vec::new();
    let mut run: Vec<(f64, f64, f64)> = Vec::new();
    let close = |run: &mut Vec<(f64, f64, f64)>, out: &mut Vec<Subsynchronous>| {
        // A line at a fixed mains frequency (50 or 60 Hz or a harmonic) is electrical pickup,
        // whatever order it passes through.
        let mains = run.iter().all(|&(order, rpm, _)| {
            let f = order * rpm / 60.0;
            (1..=4).any(|k| {
                [50.0, 60.0]
                    .iter()
                    .any(|m| (f - m * k as f64).abs() < 0.03 * m * k as f64)
            })
        });
        if run.len() >= 3 && !mains {
            let mut orders: Vec<f64> = run.iter().map(|r| r.0).collect();
            orders.sort_by(f64::total_cmp);
            out.push(Subsynchronous {
                order: orders[orders.len() / 2],
                from_rpm: run.iter().map(|r| r.1).fold(f64::INFINITY, f64::min),
                to_rpm: run.iter().map(|r| r.1).fold(0.0, f64::max),
                peak_amplitude: run.iter().map(|r| r.2).fold(0.0, f64::max),
            });
        }
        run.clear();
    };
    for f in flags {
        match f {
            Some(x) if run.last().is_none_or(|l| (l.0 - x.0).abs() < 0.05) => run.push(x),
            Some(x) => {
                close(&mut run, &mut out);
                run.push(x);
            }
            None => close(&mut run, &mut out),
        }
    }
    close(&mut run, &mut out);
    out
}

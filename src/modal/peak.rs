//! The peak method: modes from prominent peaks, signs from the quadrature response, damping
//! from half-power points and circle fits.

use super::*;

/// Local maxima of `y` standing at least 3 dB above the higher of their two flanking minima.
pub(super) fn prominent_peaks(y: &[f64]) -> Vec<usize> {
    peaks_with_flanks(y)
        .into_iter()
        .filter(|&(i, flank)| y[i] >= std::f64::consts::SQRT_2 * flank)
        .map(|(i, _)| i)
        .collect()
}

/// Every local maximum of `y` with the higher of its two flanking minima (the lowest values
/// before the spectrum rises above the maximum again on either side).
fn peaks_with_flanks(y: &[f64]) -> Vec<(usize, f64)> {
    let n = y.len();
    let mut out = Vec::new();
    for i in 1..n.saturating_sub(1) {
        if !(y[i] > y[i - 1] && y[i] >= y[i + 1]) {
            continue;
        }
        let mut l = i;
        let mut lmin = y[i];
        while l > 0 && y[l - 1] <= y[i] {
            l -= 1;
            lmin = lmin.min(y[l]);
        }
        let mut r = i;
        let mut rmin = y[i];
        while r + 1 < n && y[r + 1] <= y[i] {
            r += 1;
            rmin = rmin.min(y[r]);
        }
        out.push((i, lmin.max(rmin)));
    }
    out
}

/// Least height, dB, of a roving-sensor peak over the median level around it: its half-power
/// points then lie 3 dB or more above that floor, so their spacing is the peak's width.
const MIN_CLEAR_DB: f64 = 6.0;

/// Whether the peak at line `i` of a power spectrum `y` stands [`MIN_CLEAR_DB`] above the median
/// of ±10 % of its frequency (at least ±32 lines; the median passes over the sharp peaks of
/// sparse modes).
pub(super) fn stands_clear(y: &[f64], i: usize) -> bool {
    let half = (i / 10).max(32);
    let (lo, hi) = (i.saturating_sub(half), (i + half + 1).min(y.len()));
    let mut w = y[lo..hi].to_vec();
    let mid = w.len() / 2;
    let median = *w.select_nth_unstable_by(mid, f64::total_cmp).1;
    y[i] >= 10f64.powf(MIN_CLEAR_DB / 10.0) * median
}

/// Whether the peak at line `i` of a power spectrum `y` is less than 10 dB above the skirt that
/// the mains lines present in `y` get from the exponential window (time constant `tau_s`): a
/// stationary line of power P leaks P / (1 + (2πτΔf)²) to Δf away (the window's Lorentzian
/// spectrum, Laplace transform of e^{−t/τ}). Hum coherent on both channels of a roving-sensor
/// test rings nowhere, yet its skirt carries the ripple of the window's edges; a resonance there
/// cannot be told from it.
pub(super) fn in_mains_skirt(f: &[f64], y: &[f64], i: usize, tau_s: f64, mains: &[f64]) -> bool {
    let (Some(&f0), Some(&f1)) = (f.first(), f.last()) else {
        return false;
    };
    if !tau_s.is_finite() || f.len() < 2 {
        return false;
    }
    let df = (f1 - f0) / (f.len() - 1) as f64;
    let mut skirt = 0.0;
    for &m in mains.iter().filter(|&&m| m > 0.0) {
        let mut k = (f0 / m).ceil().max(1.0);
        while k * m <= f1 {
            let fh = k * m;
            // The line's level: the highest value within a line of its nominal frequency. Only
            // a line above the peak counts: a weaker one's skirt stays below a tenth of the peak
            // unless within a few lines, and near a mode it is the mode's own flank.
            let c = ((fh - f0) / df).round() as usize;
            let (a, b) = (c.saturating_sub(1).min(y.len()), (c + 2).min(y.len()));
            if let Some(level) = y[a..b].iter().copied().reduce(f64::max)
                && level > y[i]
            {
                let x = std::f64::consts::TAU * tau_s * (f[i] - fh);
                skirt += level / (1.0 + x * x);
            }
            k += 1.0;
        }
    }
    y[i] < 10.0 * skirt
}

/// Parabolic interpolation of ln(y) around line i: (fractional offset, peak value).
pub(super) fn interpolate_peak(y: &[f64], i: usize) -> (f64, f64) {
    if i == 0 || i + 1 >= y.len() || y[i - 1] <= 0.0 || y[i + 1] <= 0.0 {
        return (0.0, y[i]);
    }
    let (a, b, c) = (y[i - 1].ln(), y[i].ln(), y[i + 1].ln());
    let den = a - 2.0 * b + c;
    if den >= 0.0 {
        return (0.0, y[i]);
    }
    let d = 0.5 * (a - c) / den;
    (d, (b - 0.25 * (a - c) * d).exp())
}

/// Half-power width of the peak at line i of a magnitude-like `y` (`power`: y is already a
/// power, so its half-power level is y/2 rather than y/√2). Returns (f1, f2).
pub(super) fn half_power(
    f: &[f64],
    y: &[f64],
    i: usize,
    peak: f64,
    power: bool,
) -> Option<(f64, f64)> {
    let level = if power {
        peak / 2.0
    } else {
        peak / std::f64::consts::SQRT_2
    };
    let mut l = i;
    while l > 0 && y[l] > level {
        l -= 1;
    }
    let mut r = i;
    while r + 1 < y.len() && y[r] > level {
        r += 1;
    }
    if y[l] > level || y[r] > level || l == i || r == i {
        return None;
    }
    let cross = |a: usize, b: usize| f[a] + (level - y[a]) * (f[b] - f[a]) / (y[b] - y[a]);
    Some((cross(l, l + 1), cross(r - 1, r)))
}

pub(super) fn peak_modes(set: &FrfSet, res: &mut ModalResult, s: &ModalSettings) {
    let sensor = set.layout == Layout::Sensor;
    let y = if sensor {
        &res.indicators.sum_response_autospectra
    } else {
        &res.indicators.sum_abs
    };
    let f = &set.freq_hz;
    let mut flanked: Vec<(usize, f64)> = peaks_with_flanks(y)
        .into_iter()
        .filter(|&(i, flank)| y[i] >= std::f64::consts::SQRT_2 * flank)
        .collect();
    if sensor {
        // Summed auto-spectra have no coherence to tell a resonance from the ripple of the floor
        // (hum leakage, noise): a resonance's half-power points must lie clear of both, at its
        // half-power level (3 dB) above its flanks.
        let before = flanked.len();
        flanked.retain(|&(i, flank)| {
            y[i] >= 2.0 * flank
                && stands_clear(y, i)
                && !in_mains_skirt(f, y, i, set.exp_tau_s, &s.mains_hz)
        });
        let dropped = before - flanked.len();
        if dropped > 0 {
            res.warnings.push(format!(
                "{dropped} response peak(s) less than {MIN_CLEAR_DB} dB above the spectrum \
                 around them, less than 3 dB above their flanks or less than 10 dB above the \
                 window's skirt of a mains line were taken for noise or leakage, not resonances"
            ));
        }
    }
    let mut peaks: Vec<usize> = flanked.into_iter().map(|(i, _)| i).collect();
    // Rank by height for Count/Near selections.
    let mut chosen: Vec<usize> = match &s.selection {
        Selection::Auto => peaks.clone(),
        Selection::Count(n) => {
            peaks.sort_by(|a, b| y[*b].total_cmp(&y[*a]));
            peaks.into_iter().take(*n).collect()
        }
        Selection::Near(list) => list
            .iter()
            .filter_map(|&target| {
                peaks
                    .iter()
                    .copied()
                    .min_by(|a, b| (f[*a] - target).abs().total_cmp(&(f[*b] - target).abs()))
            })
            .collect(),
    };
    chosen.sort_unstable();
    chosen.dedup();
    for i in chosen {
        let (d, pk) = interpolate_peak(y, i);
        let mut fm = f[i] + d * set.df_hz;
        let mut zeta_m = half_power(f, y, i, pk, sensor).map(|(f1, f2)| (f2 - f1) / (2.0 * fm));
        // Roving sensor: the peak's whole line shape, not its half-power width (which needs
        // several lines inside the half-power band).
        if sensor
            && let Some(z0) = zeta_m
            && let Some((f_fit, z_fit)) = autospectrum::fit_peak(f, y, i, fm, z0)
        {
            fm = f_fit;
            zeta_m = Some(z_fit);
        }
        let (fc, zc) = match zeta_m {
            Some(z) => {
                let (fc, zc) = correct_damping(fm, z, set.exp_tau_s);
                (fc, Some(zc))
            }
            None => (fm, None),
        };
        let window_zeta = if set.exp_tau_s.is_finite() {
            1.0 / (set.exp_tau_s * 2.0 * std::f64::consts::PI * fm)
        } else {
            0.0
        };
        if is_hum(fc, zc.unwrap_or(0.0), window_zeta, set.df_hz, &s.mains_hz) {
            continue;
        }
        if sensor && zc.is_none() {
            res.warnings.push(format!(
                "a response peak at {fm:.2} Hz has no half-power points in the band; not reported as a mode"
            ));
            continue;
        }
        // A structural resonance is coherent at its peak; hum lines (random phase from hit to hit),
        // noise spikes and force-spectrum nulls are not.
        let coh = set.coherence.iter().map(|c| c[i]).sum::<f64>() / set.coherence.len() as f64;
        if !sensor && coh < 0.8 {
            continue;
        }
        let raw: Vec<Complex64> = set
            .h
            .iter()
            .map(|h| {
                if sensor {
                    // In-phase / out-of-phase sign of the transmissibility.
                    Complex64::new(h[i].norm() * h[i].re.signum(), 0.0)
                } else {
                    // Quadrature: signed Im(accelerance) at the peak (Ewins 2000).
                    Complex64::new(h[i].im, 0.0)
                }
            })
            .collect();
        let (hp_local, cf) = local_damping(set, fc);
        let (zc, source) = match (cf, zc) {
            (Some(c), _) if c > 0.0 => (Some(c), Some(DampingSource::CircleFit)),
            (_, Some(z)) => (
                Some(z),
                Some(if sensor {
                    DampingSource::ResponseAutospectrum
                } else {
                    DampingSource::HalfPower
                }),
            ),
            _ => (None, None),
        };
        let mut notes = vec![
            "peak picking: a single peak may hide two closely spaced modes (e.g. two bending planes); the lscf method resolves them"
                .to_string(),
        ];
        if zeta_m.is_none() {
            notes.push("half-power points not found inside the band: damping unknown".into());
        }
        if sensor {
            notes.push(
                "roving sensor: damping from the response auto-spectra; shapes are unscaled".into(),
            );
        }
        res.modes.push(Mode {
            frequency_hz: fc,
            damping_ratio: zc,
            method: Method::Peak,
            damping_source: source,
            mpc: mpc(&raw),
            mpd_deg: mean_phase_deviation_deg(&raw),
            shape: normalise(&raw, set.reference),
            measured_frequency_hz: fm,
            measured_damping_ratio: zeta_m,
            stable_orders: 0,
            damping_half_power: if sensor {
                zc.filter(|_| cf.is_none())
            } else {
                hp_local
            },
            damping_circle_fit: cf,
            notes,
        });
    }
}

/// Half-power and circle-fit damping of the resonance near `f_hz` (hammer layout), both with the
/// exponential window removed.
pub(super) fn local_damping(set: &FrfSet, f_hz: f64) -> (Option<f64>, Option<f64>) {
    if set.layout == Layout::Sensor || set.freq_hz.len() < 8 {
        return (None, None);
    }
    let k = set
        .freq_hz
        .partition_point(|&x| x < f_hz)
        .clamp(1, set.freq_hz.len() - 2);
    // The strongest station at the resonance carries the best signal.
    let Some(o) =
        (0..set.h.len()).max_by(|&a, &b| set.h[a][k].norm().total_cmp(&set.h[b][k].norm()))
    else {
        return (None, None);
    };
    let mags: Vec<f64> = set.h[o].iter().map(|c| c.norm()).collect();
    let peak = (k.saturating_sub(2)..=(k + 2).min(mags.len() - 1))
        .max_by(|&a, &b| mags[a].total_cmp(&mags[b]))
        .unwrap_or(k);
    let (d, pk) = interpolate_peak(&mags, peak);
    let fm = set.freq_hz[peak] + d * set.df_hz;
    let hp =
        half_power(&set.freq_hz, &mags, peak, pk, false).map(|(f1, f2)| (f2 - f1) / (2.0 * fm));
    let half = hp.map_or(3, |z| {
        ((2.0 * z * fm / set.df_hz).round() as usize).clamp(3, 40)
    });
    let lo = peak.saturating_sub(half);
    let hi = (peak + half).min(set.freq_hz.len() - 1);
    let cf = circle::circle_fit(&set.freq_hz, &set.h[o], lo, hi);
    let corr = |f: f64, z: f64| correct_damping(f, z, set.exp_tau_s).1;
    (hp.map(|z| corr(fm, z)), cf.map(|(f, z)| corr(f, z)))
}

/// An undamped line at a mains harmonic: hum, not a mode. `window_zeta` is the damping the
/// exponential window alone gives a pure line; an estimate well below it is a line, not a mode.
pub(super) fn is_hum(f: f64, zeta_true: f64, window_zeta: f64, df: f64, mains: &[f64]) -> bool {
    zeta_true < 3e-4f64.max(0.75 * window_zeta)
        && crate::signal::near_mains_harmonic(f, (0.5 * df).max(0.3), mains, u32::MAX)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A lightly damped resonance's power spectrum, |1/(ωn² − ω² + 2jζωnω)|² (any vibration
    /// text, e.g. Ewins 2000 §2.2), over `f`.
    fn resonance(f: &[f64], fn_hz: f64, zeta: f64, gain: f64) -> Vec<f64> {
        f.iter()
            .map(|&x| {
                let (w, wn) = (std::f64::consts::TAU * x, std::f64::consts::TAU * fn_hz);
                gain / ((wn * wn - w * w).powi(2) + (2.0 * zeta * wn * w).powi(2))
            })
            .collect()
    }

    #[test]
    fn a_resonance_stands_clear_and_a_ripple_does_not() {
        let f: Vec<f64> = (0..4000).map(|k| 100.0 + 0.5 * k as f64).collect();
        // A weak mode 8 dB over a flat floor (a real case of a station near a node).
        let floor = 1e-9;
        let peak = resonance(&f, 1200.0, 0.004, 1.0);
        let scale = 10f64.powf(0.8) * floor / peak[2200];
        let y: Vec<f64> = peak.iter().map(|p| floor + scale * p).collect();
        let i = 2200;
        assert!(stands_clear(&y, i));
        // A ±3 dB ripple of period 8 lines (leakage of a stationary line through a window's
        // edges): its crests stand 3 dB over the median, not 6.
        let ripple: Vec<f64> = (0..4000)
            .map(|k| floor * 10f64.powf(0.3 * (std::f64::consts::TAU * k as f64 / 8.0).sin()))
            .collect();
        let crest = 2002;
        assert!(ripple[crest] > ripple[crest - 1] && ripple[crest] >= ripple[crest + 1]);
        assert!(!stands_clear(&ripple, crest));
    }

    #[test]
    fn a_peak_in_a_mains_lines_window_skirt_is_set_aside() {
        let f: Vec<f64> = (0..2000).map(|k| 40.0 + 0.25 * k as f64).collect();
        let tau = 0.25;
        // A strong 50 Hz line, its Lorentzian skirt through the exponential window (Laplace
        // transform of e^{−t/τ}), and a bump 14 Hz away 3 dB above it.
        let line = |x: f64| {
            let u = std::f64::consts::TAU * tau * (x - 50.0);
            1.0 / (1.0 + u * u)
        };
        let mut y: Vec<f64> = f.iter().map(|&x| 1e-9 + line(x)).collect();
        let i = ((64.0 - 40.0) / 0.25) as usize;
        y[i] *= 2.0;
        assert!(in_mains_skirt(&f, &y, i, tau, &[50.0, 60.0]));
        // 20 dB over the skirt: a resonance, kept.
        y[i] = 100.0 * line(64.0);
        assert!(!in_mains_skirt(&f, &y, i, tau, &[50.0, 60.0]));
        // No exponential window: no skirt model, nothing set aside.
        assert!(!in_mains_skirt(&f, &y, i, f64::INFINITY, &[50.0]));
        // A mode beside a mains harmonic is not set aside by its own flank: the line at the
        // harmonic must stand above the peak.
        let m = resonance(&f, 120.4, 0.003, 1.0);
        let j = f.iter().position(|&x| x >= 120.4).unwrap();
        let j = if m[j - 1] > m[j] { j - 1 } else { j };
        assert!(!in_mains_skirt(&f, &m, j, tau, &[60.0]));
    }
}

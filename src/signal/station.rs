//! One station's recording → hits → verdicts → averaged spectra and FRF.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::carryover::{self, PulseSpan};
use super::coupling;
use super::frf::{CrossSpectra, SpectrumPlan};
use super::hits::{
    Pulse, find_pulse, find_triggers, flat_top_at, level_of, peak_abs, second_impact,
};
use super::record::RecordPlan;
use super::taps::find_strikes;
use super::verdict::Reason;
use super::window::force_window;
use crate::Complex64;
use crate::numeric::median;
use crate::setup::{AcCoupling, Layout, Setup};

/// The verdict and measurements of one hit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HitReport {
    /// 0-based order of the hit within its station's recording.
    pub index: usize,
    /// Trigger time from the start of the recording, s.
    pub time_s: f64,
    /// First sample of the record in the recording; `None` when the record did not fit.
    pub record_start: Option<usize>,
    /// Automatic reasons for rejection (empty = good).
    pub reasons: Vec<Reason>,
    /// A person's decision, which wins over the automatic one: `Some(true)` accept, `Some(false)` reject.
    pub override_accept: Option<bool>,
    /// Whether the hit enters the averages.
    pub accepted: bool,
    /// Channel A peak, fraction of full scale.
    pub peak_a_fs: f64,
    /// Channel B peak, fraction of full scale.
    pub peak_b_fs: f64,
    /// Force pulse width at 5 % of peak, s (hammer layout).
    pub pulse_width_s: Option<f64>,
    /// Delay of a second impact after the first pulse's peak, s.
    pub second_impact_s: Option<f64>,
    /// Drop of the force auto-spectrum across the band, dB (hammer layout).
    pub force_drop_db: Option<f64>,
    /// Highest frequency at which this hit's force spectrum is still within the roll-off limit of
    /// its largest value, Hz (hammer layout); ∞ (written as null) when it never falls that far
    /// inside the band.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub force_usable_hz: Option<f64>,
    /// Fraction of this hit's response energy that the station's other hits' FRF does not explain.
    pub residual_fraction: Option<f64>,
    /// Ringing carried over from earlier hits was modelled and removed from this record.
    pub ringing_removed: bool,
    /// Force window used (hammer layout): unity start, unity length and taper, in samples of
    /// the record. Derived again on every analysis, so not saved.
    #[serde(skip)]
    pub force_window: Option<[usize; 3]>,
}

/// Averaged spectra and FRF of a station over its accepted hits.
#[derive(Debug, Clone, PartialEq)]
pub struct StationFrf {
    /// Frequencies of the lines, Hz.
    pub freq_hz: Vec<f64>,
    /// FRF B/A by the setup's estimator: accelerance (m/s²)/N or transmissibility.
    pub h: Vec<Complex64>,
    /// Ordinary coherence.
    pub coherence: Vec<f64>,
    /// Averaged auto-spectrum of channel A (unit²·s²).
    pub gaa: Vec<f64>,
    /// Averaged auto-spectrum of channel B.
    pub gbb: Vec<f64>,
    /// Averaged cross-spectrum conj(A)·B.
    pub gab: Vec<Complex64>,
    /// Hits averaged.
    pub hits_averaged: usize,
}

/// Everything the chain learned about one station.
#[derive(Debug, Clone, PartialEq)]
pub struct StationResult {
    /// Every hit found, good or bad, in recording order.
    pub hits: Vec<HitReport>,
    /// The FRF, when at least one hit was accepted.
    pub frf: Option<StationFrf>,
    /// Record length, samples.
    pub record_samples: usize,
    /// Line spacing, Hz.
    pub df_hz: f64,
    /// Exponential window time constant, s (∞ = none); needed to correct damping.
    pub exp_tau_s: f64,
    /// Trigger level used, full-scale units.
    pub trigger_level_fs: f64,
    /// AC-coupling corner undone in the FRF, Hz (hammer layout), when there was one.
    pub ac_corner_hz: Option<f64>,
    /// Where the force spectrum stays within the roll-off limit of its largest value (hammer
    /// layout): the band's lower edge and the highest such line, Hz. The median over the hits.
    pub usable_band_hz: Option<[f64; 2]>,
    /// The force spectrum's first null inside the band, Hz, when there is one.
    pub first_null_hz: Option<f64>,
    /// What limited this station, in words (usable band, weak hits, …); hits are kept.
    pub notes: Vec<String>,
}

struct Candidate {
    a: Vec<Complex64>,
    b: Vec<Complex64>,
}

/// Analyses one station's recording (`a`, `b` in full-scale units at `fs`).
/// `overrides` maps hit index → accept (true) / reject (false).
/// Errors are sentences for the user (the caller names the file).
pub fn analyze_station(
    a: &[f64],
    b: &[f64],
    fs: u32,
    setup: &Setup,
    overrides: &BTreeMap<usize, bool>,
    plan: &mut Option<SpectrumPlan>,
) -> Result<StationResult, String> {
    let rp = RecordPlan::new(setup, fs, a.len().min(b.len()))?;
    let (n, pre, dt, df) = (rp.n, rp.pre, rp.dt, rp.df);
    let [lo, hi] = rp.band_hz;
    let lines = rp.lines.clone();
    let freq_hz = rp.freq_hz.clone();

    // Samples that are not numbers (a damaged float recording) are set to zero so that nothing
    // downstream sees them; the hits whose records held them are rejected below.
    let bad_a = a.iter().any(|v| !v.is_finite());
    let bad_b = b.iter().any(|v| !v.is_finite());
    let (clean_a, clean_b);
    let (a, b, bad): (&[f64], &[f64], Vec<usize>) = if bad_a || bad_b {
        let bad: Vec<usize> = (0..a.len().min(b.len()))
            .filter(|&i| !a[i].is_finite() || !b[i].is_finite())
            .collect();
        let zero = |x: &[f64]| -> Vec<f64> {
            x.iter()
                .map(|v| if v.is_finite() { *v } else { 0.0 })
                .collect()
        };
        clean_a = zero(a);
        clean_b = zero(b);
        (&clean_a, &clean_b, bad)
    } else {
        (a, b, Vec::new())
    };
    if plan.as_ref().is_none_or(|p| p.len() != n) {
        *plan = Some(SpectrumPlan::new(n));
    }
    let plan = plan.as_mut().expect("plan set above");

    let level = level_of(a, setup.trigger.level);
    // A hold-off a person set is obeyed as given; otherwise taps are found by their onsets, so
    // neither ringing nor a next tap within one record length is mistaken for anything else.
    let triggers = match setup.trigger.holdoff_s {
        Some(h) => find_triggers(
            a,
            level,
            setup.trigger.slope,
            (h * fs as f64).round() as usize,
        ),
        None => find_strikes(a, level, setup.trigger.slope, fs),
    };
    if triggers.is_empty() && !bad.is_empty() {
        return Err(format!(
            "no hit found, and {} samples are non-finite (NaN or infinity): the recording is damaged",
            bad.len()
        ));
    }
    if triggers.is_empty() {
        return Err(format!(
            "no hit found: channel A never crossed the trigger level ({:.3} % of full scale, {:?} slope)",
            level * 100.0,
            setup.trigger.slope
        ));
    }

    let sign = setup.trigger.slope.sign();
    let q = &setup.quality;
    // Soft tips give pulses of several ms; 20 ms bounds the search for the peak.
    let max_pulse = (0.02 * fs as f64) as usize;
    // Each hammer pulse is located once, in the whole recording; the records and the carry-over
    // and coupling models all use it.
    let pulses: Vec<Option<Pulse>> = triggers
        .iter()
        .map(|&t| (setup.layout == Layout::Hammer).then(|| find_pulse(a, t, sign, max_pulse)))
        .collect();
    let spans: Vec<PulseSpan> = triggers
        .iter()
        .zip(&pulses)
        .map(|(&t, p)| match p {
            Some(p) => PulseSpan {
                trigger: t,
                start: p.start,
                end: p.end + 1,
            },
            None => PulseSpan {
                trigger: t,
                start: t.saturating_sub(fs as usize / 1000),
                end: (t + 3 * fs as usize / 1000).min(a.len()),
            },
        })
        .collect();
    // Ringing from earlier hits: always on the response; on the reference too when it is an
    // accelerometer (sensor layout).
    let (corr_a, corr_b) = match (setup.remove_carryover, setup.layout) {
        (false, _) => (vec![None; spans.len()], vec![None; spans.len()]),
        (true, Layout::Hammer) => (
            vec![None; spans.len()],
            carryover::corrections(b, fs, &spans, pre, n, [lo, hi]),
        ),
        (true, Layout::Sensor) => (
            carryover::corrections(a, fs, &spans, pre, n, [lo, hi]),
            carryover::corrections(b, fs, &spans, pre, n, [lo, hi]),
        ),
    };
    let (scale_a, scale_b, tau) = (rp.scale_a, rp.scale_b, rp.tau_s);
    let ew = &rp.exp_window;
    // Undo the interface's high-pass, which the force window leaves in the response only (see
    // `coupling`); in the sensor layout both channels are responses and it cancels.
    let corner_hz = match (setup.layout, setup.ac_coupling) {
        (Layout::Sensor, _) | (_, AcCoupling::None) => None,
        (Layout::Hammer, AcCoupling::CornerHz(f)) => Some(f),
        (Layout::Hammer, AcCoupling::Auto) => coupling::station_corner_hz(a, &spans, fs, sign, 3),
    };
    let unhp = corner_hz.map(|fc| coupling::inverse_factors(&freq_hz, fc, tau));

    let mut hits = Vec::with_capacity(triggers.len());
    let mut nulls: Vec<Option<f64>> = Vec::new();
    let mut cands: Vec<Option<Candidate>> = Vec::with_capacity(triggers.len());
    for (index, &trig) in triggers.iter().enumerate() {
        let mut rep = HitReport {
            index,
            time_s: trig as f64 * dt,
            record_start: None,
            reasons: Vec::new(),
            override_accept: overrides.get(&index).copied(),
            accepted: false,
            peak_a_fs: 0.0,
            peak_b_fs: 0.0,
            pulse_width_s: None,
            second_impact_s: None,
            force_drop_db: None,
            force_usable_hz: None,
            residual_fraction: None,
            ringing_removed: false,
            force_window: None,
        };
        let Some(start) = trig.checked_sub(pre).filter(|s| s + n <= a.len()) else {
            rep.reasons.push(Reason::Truncated);
            hits.push(rep);
            cands.push(None);
            continue;
        };
        rep.record_start = Some(start);
        // The next tap's pulse, in record indices, when it falls inside this record.
        let next_in_record = spans
            .get(index + 1)
            .map(|nx| nx.start.saturating_sub(start))
            .filter(|&k| k < n);
        if next_in_record.is_some() {
            rep.reasons.push(Reason::NextTapInRecord);
        }
        let first_bad = bad.partition_point(|&i| i < start);
        if bad.get(first_bad).is_some_and(|&i| i < start + n) {
            rep.reasons.push(Reason::Corrupt);
        }
        let ra = &a[start..start + n];
        let rb = &b[start..start + n];
        // Overload checks see the raw samples; the spectra see the samples with any carried-over
        // ringing removed.
        let fix = |raw: &[f64], c: &Option<Vec<f64>>| -> Option<Vec<f64>> {
            c.as_ref()
                .map(|c| raw.iter().zip(c).map(|(r, c)| r - c).collect())
        };
        let (fa, fb) = (fix(ra, &corr_a[index]), fix(rb, &corr_b[index]));
        rep.ringing_removed = fa.is_some() || fb.is_some();
        rep.peak_a_fs = peak_abs(ra);
        rep.peak_b_fs = peak_abs(rb);
        if rep.peak_a_fs >= q.overload_fraction
            || rep.peak_b_fs >= q.overload_fraction
            || flat_top_at(ra, rep.peak_a_fs)
            || flat_top_at(rb, rep.peak_b_fs)
        {
            rep.reasons.push(Reason::Overload);
        }

        // Each channel is baseline-removed, scaled to SI units and windowed in one pass, straight
        // into the FFT's input buffer.
        let ra_w: &[f64] = fa.as_deref().unwrap_or(ra);
        let rb_w: &[f64] = fb.as_deref().unwrap_or(rb);
        let (sa, sb) = match setup.layout {
            Layout::Hammer => {
                // The file-level pulse, in record indices (clipped to the record).
                let fp = pulses[index].expect("hammer layout locates every pulse");
                let pulse = Pulse {
                    start: fp.start.max(start) - start,
                    peak: fp.peak.clamp(start, start + n - 1) - start,
                    end: fp.end.clamp(start, start + n - 1) - start,
                    peak_value: fp.peak_value,
                };
                let width = pulse.width();
                rep.pulse_width_s = Some(width as f64 * dt);
                // A rebound belongs to this tap; the next tap (already its own reason) does not.
                let strike = &ra[..next_in_record.unwrap_or(n).max(pulse.end + 1).min(n)];
                if let Some(i2) = second_impact(strike, &pulse, sign, q.double_hit_fraction) {
                    rep.reasons.push(Reason::DoubleHit);
                    rep.second_impact_s = Some((i2 - pulse.peak) as f64 * dt);
                }
                let lead = width;
                let wstart = pulse.start.saturating_sub(lead);
                let unity = setup
                    .windows
                    .force_unity_s
                    .map(|s| (s * fs as f64).round() as usize)
                    .unwrap_or(4 * width)
                    .max(1);
                let taper = setup
                    .windows
                    .force_taper_s
                    .map(|s| (s * fs as f64).round() as usize)
                    .unwrap_or(width);
                rep.force_window = Some([wstart, unity, taper]);
                let (ma, mb) = baseline(ra_w, rb_w, wstart.saturating_sub(taper));
                let (lo, fw) = force_window(n, wstart, unity, taper);
                let sa = plan.lines_of(
                    |x| {
                        x.fill(0.0);
                        for (k, w) in fw.iter().enumerate() {
                            let i = lo + k;
                            x[i] = (ra_w[i] - ma) * scale_a * w * ew[i];
                        }
                    },
                    dt,
                    lines.clone(),
                );
                let mut sb =
                    plan.lines_of(|x| windowed(x, rb_w, mb, scale_b, ew), dt, lines.clone());
                if let Some(u) = &unhp {
                    sb.iter_mut().zip(u).for_each(|(v, u)| *v *= u);
                }
                (sa, sb)
            }
            Layout::Sensor => {
                let (ma, mb) = baseline(ra_w, rb_w, pre.saturating_sub(pre / 10));
                let sa = plan.lines_of(|x| windowed(x, ra_w, ma, scale_a, ew), dt, lines.clone());
                let sb = plan.lines_of(|x| windowed(x, rb_w, mb, scale_b, ew), dt, lines.clone());
                (sa, sb)
            }
        };
        if setup.layout == Layout::Hammer && !rep.reasons.contains(&Reason::DoubleHit) {
            let shape = force_shape(&sa, &freq_hz, q.rolloff_db);
            rep.force_drop_db = Some(shape.drop_db);
            rep.force_usable_hz = Some(shape.usable_hz);
            nulls.push(shape.first_null_hz);
        }
        hits.push(rep);
        cands.push(Some(Candidate { a: sa, b: sb }));
    }

    let notes = judge_against_siblings(&mut hits, &cands, setup, &freq_hz);
    flag_outliers(&mut hits, &cands, setup);

    let mut sums = CrossSpectra::new(freq_hz.len());
    for (rep, c) in hits.iter_mut().zip(&cands) {
        rep.accepted = c.is_some() && rep.override_accept.unwrap_or(rep.reasons.is_empty());
        if rep.accepted
            && let Some(c) = c
        {
            sums.add(&c.a, &c.b);
        }
    }
    let frf = (sums.count > 0).then(|| {
        let (gaa, gbb, gab) = sums.averaged();
        StationFrf {
            h: sums.estimate(setup.estimator),
            coherence: sums.coherence(),
            freq_hz,
            gaa,
            gbb,
            gab,
            hits_averaged: sums.count,
        }
    });
    let (usable_band_hz, first_null_hz) = usable_band(&hits, &nulls, [lo, hi]);
    let mut notes = notes;
    if !bad.is_empty() {
        notes.push(format!(
            "{} samples are not numbers (NaN or infinity); they were read as zero and the hits \
             whose records hold them are rejected",
            bad.len()
        ));
    }
    Ok(StationResult {
        hits,
        frf,
        record_samples: n,
        df_hz: df,
        exp_tau_s: tau,
        trigger_level_fs: level,
        ac_corner_hz: corner_hz,
        usable_band_hz,
        first_null_hz,
        notes,
    })
}

/// One hit's record as the chain saw it, for display: both channels in engineering units with
/// the pretrigger baseline removed, the windows applied to them, and the force auto-spectrum.
#[derive(Debug, Clone, PartialEq)]
pub struct HitTraces {
    /// Time of each sample from the trigger, s (negative in the pretrigger).
    pub time_s: Vec<f64>,
    /// Channel A (force N, or reference m/s²).
    pub a: Vec<f64>,
    /// Channel B (response m/s²).
    pub b: Vec<f64>,
    /// Window on channel A (force window × exponential in the hammer layout).
    pub window_a: Vec<f64>,
    /// Window on channel B (exponential).
    pub window_b: Vec<f64>,
    /// Samples before the trigger.
    pub pretrigger_samples: usize,
    /// Lines of the force spectrum, Hz (the analysis band).
    pub spectrum_freq_hz: Vec<f64>,
    /// Windowed channel-A auto-spectrum, dB relative to its largest line in the band.
    pub spectrum_a_db: Vec<f64>,
}

/// Cuts hit `hit` of a station's recording (`a`, `b` in full-scale units) as
/// [`analyze_station`] did. `None` when the hit's record did not fit in the recording.
pub fn hit_traces(
    a: &[f64],
    b: &[f64],
    fs: u32,
    setup: &Setup,
    hit: &HitReport,
) -> Option<HitTraces> {
    let rp = RecordPlan::new(setup, fs, a.len().min(b.len())).ok()?;
    let (n, pre, dt) = (rp.n, rp.pre, rp.dt);
    let start = hit.record_start?;
    if start + n > a.len() || start + n > b.len() {
        return None;
    }
    let ew = rp.exp_window.clone();
    let ra = &a[start..start + n];
    let rb = &b[start..start + n];
    let (window_a, base_end) = match hit.force_window {
        Some([wstart, unity, taper]) => {
            let (lo, fw) = force_window(n, wstart, unity, taper);
            let mut w = vec![0.0; n];
            for (k, v) in fw.iter().enumerate() {
                w[lo + k] = v * ew[lo + k];
            }
            (w, wstart.saturating_sub(taper))
        }
        None => (ew.clone(), pre.saturating_sub(pre / 10)),
    };
    let (ma, mb) = baseline(ra, rb, base_end);
    let ta: Vec<f64> = ra.iter().map(|v| (v - ma) * rp.scale_a).collect();
    let tb: Vec<f64> = rb.iter().map(|v| (v - mb) * rp.scale_b).collect();
    let mut plan = SpectrumPlan::new(n);
    let windowed_a: Vec<f64> = ta.iter().zip(&window_a).map(|(v, w)| v * w).collect();
    let lines = plan.lines(&windowed_a, dt, rp.lines.clone());
    let p: Vec<f64> = lines.iter().map(|c| c.norm_sqr()).collect();
    let pmax = p.iter().copied().fold(0.0f64, f64::max);
    let spectrum_a_db = p
        .iter()
        .map(|&v| {
            if pmax > 0.0 && v > 0.0 {
                10.0 * (v / pmax).log10()
            } else {
                -200.0
            }
        })
        .collect();
    Some(HitTraces {
        time_s: (0..n).map(|i| (i as f64 - pre as f64) * dt).collect(),
        a: ta,
        b: tb,
        window_a,
        window_b: ew,
        pretrigger_samples: pre,
        spectrum_freq_hz: rp.freq_hz,
        spectrum_a_db,
    })
}

/// `out = (raw − mean) · scale · w`.
fn windowed(out: &mut [f64], raw: &[f64], mean: f64, scale: f64, w: &[f64]) {
    for ((o, r), w) in out.iter_mut().zip(raw).zip(w) {
        *o = (r - mean) * scale * w;
    }
}

fn baseline(ra: &[f64], rb: &[f64], end: usize) -> (f64, f64) {
    if end < 8 {
        return (0.0, 0.0);
    }
    let m = |x: &[f64]| x[..end].iter().sum::<f64>() / end as f64;
    (m(ra), m(rb))
}

/// What a hit's force spectrum says about the tip and the band.
struct ForceShape {
    drop_db: f64,
    usable_hz: f64,
    first_null_hz: Option<f64>,
}

/// The force spectrum's in-band drop, the highest line still within `rolloff_db` of its largest
/// value, and the first null after that (a minimum 30 dB or more below the largest value with the
/// spectrum rising again after it: a half-sine's first null lies at 1.5/Tc, derived).
fn force_shape(sa: &[Complex64], freq_hz: &[f64], rolloff_db: f64) -> ForceShape {
    let p: Vec<f64> = sa.iter().map(|c| c.norm_sqr()).collect();
    let (mx, mn) = p.iter().fold((0.0f64, f64::INFINITY), |(mx, mn), &v| {
        (mx.max(v), mn.min(v))
    });
    let drop_db = if mn > 0.0 && mx > 0.0 {
        10.0 * (mx / mn).log10()
    } else {
        f64::INFINITY
    };
    let limit = mx * 10f64.powf(-rolloff_db / 10.0);
    let last = freq_hz.len().saturating_sub(1);
    let edge = p.iter().position(|&v| v < limit).unwrap_or(last + 1);
    let usable_hz = if edge > last {
        f64::INFINITY
    } else {
        freq_hz[edge.saturating_sub(1)]
    };
    let mut first_null_hz = None;
    if edge <= last {
        // Follow the fall to its bottom; it is a null when the spectrum climbs back after it.
        let mut k = edge;
        while k < last && p[k + 1] <= p[k] {
            k += 1;
        }
        let deep = p[k] < mx * 1e-3;
        let rises = p[k..].iter().any(|&v| v > 10.0 * p[k]);
        if deep && rises {
            first_null_hz = Some(freq_hz[k]);
        }
    }
    ForceShape {
        drop_db,
        usable_hz,
        first_null_hz,
    }
}

/// A soft strike or a weak one is a fault of that hit only when its siblings did better; when every
/// hit of the station shares it, it is a property of the tip, the gain or the band, reported once
/// for the station while the hits are kept. Returns the station's notes.
fn judge_against_siblings(
    hits: &mut [HitReport],
    cands: &[Option<Candidate>],
    setup: &Setup,
    freq_hz: &[f64],
) -> Vec<String> {
    let q = &setup.quality;
    let mut notes = Vec::new();
    let usable: Vec<usize> = (0..hits.len())
        .filter(|&i| {
            cands[i].is_some()
                && !hits[i]
                    .reasons
                    .iter()
                    .any(|r| matches!(r, Reason::Overload | Reason::DoubleHit))
        })
        .collect();
    let others = |i: usize, f: &dyn Fn(&HitReport) -> Option<f64>| -> Option<f64> {
        let v: Vec<f64> = usable
            .iter()
            .filter(|&&j| j != i)
            .filter_map(|&j| f(&hits[j]))
            .collect();
        (v.len() >= 2).then_some(v).and_then(median)
    };
    let band_top = freq_hz.last().copied().unwrap_or(0.0);
    let mut soft = Vec::new();
    let mut weak = Vec::new();
    for &i in &usable {
        if let (Some(u), Some(m)) = (hits[i].force_usable_hz, others(i, &|h| h.force_usable_hz))
            && u < band_top
            && u < 0.7 * m.min(band_top)
        {
            soft.push(i);
        }
        let pk = hits[i].peak_a_fs;
        if pk < q.weak_fraction && others(i, &|h| Some(h.peak_a_fs)).is_some_and(|m| pk < 0.5 * m) {
            weak.push(i);
        }
    }
    for i in soft {
        hits[i].reasons.push(Reason::TipRolloff);
    }
    for i in weak {
        hits[i].reasons.push(Reason::Weak);
    }
    let kept: Vec<&HitReport> = usable
        .iter()
        .map(|&i| &hits[i])
        .filter(|h| h.reasons.is_empty())
        .collect();
    if !kept.is_empty() && kept.iter().all(|h| h.peak_a_fs < q.weak_fraction) {
        let top = kept.iter().map(|h| h.peak_a_fs).fold(0.0f64, f64::max);
        notes.push(format!(
            "every hit is weak (largest channel-A peak {:.1} % of full scale): the hits are kept, \
             but raise the input gain or tap harder next time",
            top * 100.0
        ));
    }
    notes
}

/// The station's usable band: the median over its kept hits of each hit's usable upper edge.
fn usable_band(
    hits: &[HitReport],
    nulls: &[Option<f64>],
    [lo, hi]: [f64; 2],
) -> (Option<[f64; 2]>, Option<f64>) {
    let edges: Vec<f64> = hits
        .iter()
        .filter(|h| h.accepted)
        .filter_map(|h| h.force_usable_hz)
        .collect();
    let edges = if edges.is_empty() {
        hits.iter().filter_map(|h| h.force_usable_hz).collect()
    } else {
        edges
    };
    let Some(top) = median(edges) else {
        return (None, None);
    };
    let null = median(nulls.iter().flatten().copied().collect());
    (Some([lo, top.min(hi)]), null)
}

/// Leave-one-out comparison of each candidate hit with the station's other hits: the fraction of
/// the hit's response energy that the others' H1 does not explain, r = Σ|B − H·A|² / Σ|B|².
/// Weighting by the hit's own spectra keeps lines where channel A is near zero (antiresonances
/// of a reference, force-spectrum nulls) from dominating. The worst hit is flagged when r exceeds
/// the limit *and* stands clearly apart (3× the others' median), so a uniformly noisy station keeps
/// its hits; repeated while three or more candidates remain.
fn flag_outliers(hits: &mut [HitReport], cands: &[Option<Candidate>], setup: &Setup) {
    let limit = setup.quality.outlier_max_residual;
    let in_pool = |h: &HitReport| match h.override_accept {
        Some(v) => v,
        None => h.reasons.is_empty(),
    };
    let mut pool: Vec<usize> = (0..hits.len())
        .filter(|&i| cands[i].is_some() && in_pool(&hits[i]))
        .collect();
    let Some(first) = pool.first().and_then(|&i| cands[i].as_ref()) else {
        return;
    };
    let nl = first.a.len();
    loop {
        if pool.len() < 3 {
            return;
        }
        let mut total = CrossSpectra::new(nl);
        for &i in &pool {
            let c = cands[i].as_ref().expect("pool holds candidates");
            total.add(&c.a, &c.b);
        }
        let mut residual = Vec::with_capacity(pool.len());
        for &i in &pool {
            let c = cands[i].as_ref().expect("pool holds candidates");
            let (mut miss, mut energy) = (0.0, 0.0);
            for k in 0..nl {
                let gaa = total.gaa[k] - c.a[k].norm_sqr();
                let gab = total.gab[k] - c.a[k].conj() * c.b[k];
                energy += c.b[k].norm_sqr();
                if gaa > 0.0 {
                    miss += (c.b[k] - gab / gaa * c.a[k]).norm_sqr();
                }
            }
            let r = if energy > 0.0 { miss / energy } else { 0.0 };
            hits[i].residual_fraction = Some(r);
            residual.push(r);
        }
        let (wi, &worst) = residual
            .iter()
            .enumerate()
            .max_by(|x, y| x.1.total_cmp(y.1))
            .expect("pool is not empty");
        let mut others: Vec<f64> = residual
            .iter()
            .enumerate()
            .filter(|(i, _)| *i != wi)
            .map(|(_, r)| *r)
            .collect();
        let m = others.len() / 2;
        let med = *others.select_nth_unstable_by(m, f64::total_cmp).1;
        let hit = pool[wi];
        if worst > limit && worst > 3.0 * med && hits[hit].override_accept.is_none() {
            hits[hit].reasons.push(Reason::Outlier);
            pool.remove(wi);
        } else {
            return;
        }
    }
}

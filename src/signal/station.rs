//! One station's recording → hits → verdicts → averaged spectra and FRF.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::carryover::{self, RingingPoles};
use super::coupling;
use super::cut::{Candidate, FiniteChannels, HitCutter, baseline, locate_taps, pulse_spans};
use super::frf::{CrossSpectra, SpectrumPlan};
use super::hits::{Pulse, level_of};
use super::record::RecordPlan;
use super::taps::BlockPeaks;
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
    /// Where each tap was found (trigger sample), in recording order.
    pub tap_samples: Vec<usize>,
    /// Samples that were not finite (NaN or ±∞) in either channel, read as zero.
    pub non_finite_samples: usize,
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

/// A station's recording as the chain reads it: the record plan, the channels with non-finite
/// samples read as zero, and where the taps and their pulses lie. The analysis and the lending
/// of free decays both start here, so they cannot disagree on where the taps are.
struct Located<'a> {
    rp: RecordPlan,
    finite: FiniteChannels<'a>,
    /// Block maxima of channels A and B (as read: non-finite samples zero).
    peaks: [BlockPeaks; 2],
    level: f64,
    triggers: Vec<usize>,
    pulses: Vec<Option<Pulse>>,
    spans: Vec<carryover::PulseSpan>,
}

impl<'a> Located<'a> {
    fn of(
        a: &'a [f64],
        b: &'a [f64],
        fs: u32,
        setup: &Setup,
        previous: Option<&RecordPlan>,
    ) -> Result<Self, String> {
        let rp = RecordPlan::new_after(setup, fs, a.len().min(b.len()), previous)?;
        // The channels' block maxima also say whether they are finite: one pass each, which
        // the tap search and every hit's peak then read instead of the samples.
        let (pa, pb) = (BlockPeaks::of(a, fs), BlockPeaks::of(b, fs));
        let finite = FiniteChannels::of(a, b, pa.finite && pb.finite);
        let peaks = if finite.bad.is_empty() {
            [pa, pb]
        } else {
            [
                BlockPeaks::of(finite.a(), fs),
                BlockPeaks::of(finite.b(), fs),
            ]
        };
        let level = level_of(finite.a(), setup.trigger.level);
        let triggers = locate_taps(finite.a(), &peaks[0], fs, setup, level, finite.bad.len())?;
        let (pulses, spans) = pulse_spans(finite.a(), fs, setup, &triggers);
        Ok(Self {
            rp,
            finite,
            peaks,
            level,
            triggers,
            pulses,
            spans,
        })
    }
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
    let mut plans = StationPlans {
        spectrum: plan.take(),
        ..StationPlans::default()
    };
    let r = analyze_station_in_test(a, b, fs, setup, overrides, &mut plans, RingingPoles::Own);
    *plan = plans.spectrum;
    r
}

/// What one station's analysis leaves for the next of the same test: the FFT plan, the record
/// plan (whose exponential window is reused when it is the same) and the record buffers, so that
/// a test's stations do not each fault in fresh memory.
#[derive(Default)]
pub struct StationPlans {
    spectrum: Option<SpectrumPlan>,
    record: Option<RecordPlan>,
    /// Records with carried-over ringing removed, reused from hit to hit.
    scratch: [Vec<f64>; 2],
}

/// [`analyze_station`] as one station of a test whose stations share the poles of the part's
/// carried-over ringing (see [`RingingPoles`]).
pub fn analyze_station_in_test(
    a: &[f64],
    b: &[f64],
    fs: u32,
    setup: &Setup,
    overrides: &BTreeMap<usize, bool>,
    plans: &mut StationPlans,
    ringing: RingingPoles,
) -> Result<StationResult, String> {
    let Located {
        rp,
        finite,
        peaks,
        level,
        triggers,
        pulses,
        spans,
    } = Located::of(a, b, fs, setup, plans.record.as_ref())?;
    let (a, b) = (finite.a(), finite.b());
    plans.record = Some(rp.clone());
    let (plan, scratch) = (&mut plans.spectrum, &mut plans.scratch);
    if plan.as_ref().is_none_or(|p| p.len() != rp.n) {
        *plan = Some(SpectrumPlan::new(rp.n));
    }
    let plan = plan.as_mut().expect("plan set above");

    // Ringing from earlier hits: always on the response; on the reference too when it is an
    // accelerometer (sensor layout).
    let (pre, n, band) = (rp.pre, rp.n, rp.band_hz);
    let corrections = |x: &[f64]| carryover::corrections(x, fs, &spans, pre, n, band, ringing);
    let (corr_a, corr_b) = match (setup.remove_carryover, setup.layout) {
        (false, _) => (vec![None; spans.len()], vec![None; spans.len()]),
        (true, Layout::Hammer) => (vec![None; spans.len()], corrections(b)),
        (true, Layout::Sensor) => (corrections(a), corrections(b)),
    };
    // Undo the interface's high-pass, which the force window leaves in the response only (see
    // `coupling`); in the sensor layout both channels are responses and it cancels.
    let sign = setup.trigger.slope.sign();
    let corner_hz = match (setup.layout, setup.ac_coupling) {
        (Layout::Sensor, _) | (_, AcCoupling::None) => None,
        (Layout::Hammer, AcCoupling::CornerHz(f)) => Some(f),
        (Layout::Hammer, AcCoupling::Auto) => coupling::station_corner_hz(a, &spans, fs, sign, 3),
    };
    let cutter = HitCutter {
        a,
        b,
        fs,
        setup,
        rp: &rp,
        bad: &finite.bad,
        peaks: &peaks,
        spans: &spans,
        pulses: &pulses,
        corr_a: &corr_a,
        corr_b: &corr_b,
        unhp: corner_hz.map(|fc| coupling::inverse_factors(&rp.freq_hz, fc, rp.tau_s)),
    };
    let mut hits = Vec::with_capacity(triggers.len());
    let mut nulls: Vec<Option<f64>> = Vec::new();
    let mut cands: Vec<Option<Candidate>> = Vec::with_capacity(triggers.len());
    for (index, &trig) in triggers.iter().enumerate() {
        let cut = cutter.cut(plan, scratch, index, trig, overrides.get(&index).copied());
        if let Some(null) = cut.first_null_hz {
            nulls.push(null);
        }
        hits.push(cut.report);
        cands.push(cut.spectra);
    }

    let mut notes = judge_against_siblings(&mut hits, &cands, setup, &rp.freq_hz);
    flag_outliers(&mut hits, &cands, setup);
    let frf = average_accepted(&mut hits, &cands, setup, &rp.freq_hz);
    let (usable_band_hz, first_null_hz) = usable_band(&hits, &nulls, band);
    if !finite.bad.is_empty() {
        notes.push(format!(
            "{} samples are not numbers (NaN or infinity); they were read as zero and the hits \
             whose records hold them are rejected",
            finite.bad.len()
        ));
    }
    Ok(StationResult {
        hits,
        frf,
        record_samples: n,
        df_hz: rp.df,
        exp_tau_s: rp.tau_s,
        trigger_level_fs: level,
        tap_samples: triggers.clone(),
        non_finite_samples: finite.bad.len(),
        ac_corner_hz: corner_hz,
        usable_band_hz,
        first_null_hz,
        notes,
    })
}

/// Copies of a few of the station's free decays (between its taps) on the channels that carry
/// ringing worth removing, for the test's estimate of its ringing poles
/// ([`carryover::test_poles`]); empty when none does. Errors as [`analyze_station`]'s.
pub fn lend_free_decays(
    a: &[f64],
    b: &[f64],
    fs: u32,
    setup: &Setup,
    plans: &mut StationPlans,
) -> Result<Vec<Vec<f64>>, String> {
    let Located {
        rp, finite, spans, ..
    } = Located::of(a, b, fs, setup, plans.record.as_ref())?;
    let (a, b) = (finite.a(), finite.b());
    let lend = |x: &[f64]| carryover::lend_decays(x, fs, &spans, rp.pre, rp.n, rp.band_hz);
    let lent = match (setup.remove_carryover, setup.layout) {
        (false, _) => Vec::new(),
        (true, Layout::Hammer) => lend(b),
        (true, Layout::Sensor) => [lend(a), lend(b)].concat(),
    };
    plans.record = Some(rp);
    Ok(lent)
}

/// The decisions (a person's override wins) and the average of the accepted hits' spectra.
fn average_accepted(
    hits: &mut [HitReport],
    cands: &[Option<Candidate>],
    setup: &Setup,
    freq_hz: &[f64],
) -> Option<StationFrf> {
    let mut sums = CrossSpectra::new(freq_hz.len());
    for (rep, c) in hits.iter_mut().zip(cands) {
        rep.accepted = c.is_some() && rep.override_accept.unwrap_or(rep.reasons.is_empty());
        if rep.accepted
            && let Some(c) = c
        {
            sums.add(&c.a, &c.b);
        }
    }
    (sums.count > 0).then(|| {
        let (gaa, gbb, gab) = sums.averaged();
        StationFrf {
            h: sums.estimate(setup.estimator),
            coherence: sums.coherence(),
            freq_hz: freq_hz.to_vec(),
            gaa,
            gbb,
            gab,
            hits_averaged: sums.count,
        }
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
    let ew = rp.exp_window.to_vec();
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

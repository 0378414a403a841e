//! Cutting one station's recording into hit records: non-finite samples, where the taps start,
//! the force pulses, and each hit's checks, windows and spectra.

use super::carryover::{PulseSpan, RingingModel};
use super::frf::SpectrumPlan;
use super::hits::{Pulse, find_pulse, find_triggers, flat_top_in, second_impact};
use super::record::RecordPlan;
use super::station::HitReport;
use super::taps::{BlockPeaks, find_strikes_in};
use super::verdict::Reason;
use super::window::force_window;
use crate::Complex64;
use crate::setup::{Layout, Setup};

/// One hit's spectra of channel A and B over the analysis lines.
pub(super) struct Candidate {
    pub(super) a: Vec<Complex64>,
    pub(super) b: Vec<Complex64>,
}

/// Both channels with every non-finite sample (a damaged float recording) read as zero, so
/// that nothing downstream sees one; `bad` lists where they were, so the hits whose records
/// held them can be rejected. Borrows the input when it is clean.
pub(super) struct FiniteChannels<'a> {
    a: std::borrow::Cow<'a, [f64]>,
    b: std::borrow::Cow<'a, [f64]>,
    pub(super) bad: Vec<usize>,
}

impl<'a> FiniteChannels<'a> {
    /// `finite`: whether both channels are known finite (their block maxima were taken first).
    pub(super) fn of(a: &'a [f64], b: &'a [f64], finite: bool) -> Self {
        use std::borrow::Cow;
        if finite {
            return Self {
                a: Cow::Borrowed(a),
                b: Cow::Borrowed(b),
                bad: Vec::new(),
            };
        }
        let bad = (0..a.len().min(b.len()))
            .filter(|&i| !a[i].is_finite() || !b[i].is_finite())
            .collect();
        let zero = |x: &[f64]| -> Vec<f64> {
            x.iter()
                .map(|v| if v.is_finite() { *v } else { 0.0 })
                .collect()
        };
        Self {
            a: Cow::Owned(zero(a)),
            b: Cow::Owned(zero(b)),
            bad,
        }
    }

    pub(super) fn a(&self) -> &[f64] {
        &self.a
    }

    pub(super) fn b(&self) -> &[f64] {
        &self.b
    }
}

/// Where the taps start. A hold-off a person set is obeyed as given; otherwise taps are found
/// by their onsets, so neither ringing nor a next tap within one record length is mistaken for
/// anything else.
pub(super) fn locate_taps(
    a: &[f64],
    peaks: &BlockPeaks,
    fs: u32,
    setup: &Setup,
    level: f64,
    non_finite: usize,
) -> Result<Vec<usize>, String> {
    let triggers = match setup.trigger.holdoff_s {
        Some(h) => find_triggers(
            a,
            level,
            setup.trigger.slope,
            (h * fs as f64).round() as usize,
        ),
        None => find_strikes_in(a, peaks, level, setup.trigger.slope, fs),
    };
    if triggers.is_empty() && non_finite > 0 {
        return Err(format!(
            "no hit found, and {non_finite} samples are non-finite (NaN or infinity): the recording is damaged"
        ));
    }
    if triggers.is_empty() {
        return Err(format!(
            "no hit found: channel A never crossed the trigger level ({:.3} % of full scale, {:?} slope)",
            level * 100.0,
            setup.trigger.slope
        ));
    }
    Ok(triggers)
}

/// Each hammer pulse, located once in the whole recording (the records and the carry-over and
/// coupling models all use it), and the span each tap occupies. In the sensor layout there is
/// no force pulse: the span is a few milliseconds around the trigger.
pub(super) fn pulse_spans(
    a: &[f64],
    fs: u32,
    setup: &Setup,
    triggers: &[usize],
) -> (Vec<Option<Pulse>>, Vec<PulseSpan>) {
    let sign = setup.trigger.slope.sign();
    // Soft tips give pulses of several ms; 20 ms bounds the search for the peak.
    let max_pulse = (0.02 * fs as f64) as usize;
    let pulses: Vec<Option<Pulse>> = triggers
        .iter()
        .map(|&t| (setup.layout == Layout::Hammer).then(|| find_pulse(a, t, sign, max_pulse)))
        .collect();
    let spans = triggers
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
    (pulses, spans)
}

/// What one hit gave: its report, its spectra when its record fitted, and the first null of
/// its force spectrum (hammer layout, single impacts only; the inner `None` = no null in band).
pub(super) struct Cut {
    pub(super) report: HitReport,
    pub(super) spectra: Option<Candidate>,
    pub(super) first_null_hz: Option<Option<f64>>,
}

/// What every hit of a station shares while it is cut, checked and transformed.
pub(super) struct HitCutter<'a> {
    pub(super) a: &'a [f64],
    pub(super) b: &'a [f64],
    pub(super) fs: u32,
    pub(super) setup: &'a Setup,
    pub(super) rp: &'a RecordPlan,
    pub(super) bad: &'a [usize],
    /// Block maxima of channels A and B.
    pub(super) peaks: &'a [BlockPeaks; 2],
    pub(super) spans: &'a [PulseSpan],
    pub(super) pulses: &'a [Option<Pulse>],
    pub(super) corr_a: &'a [Option<RingingModel>],
    pub(super) corr_b: &'a [Option<RingingModel>],
    /// Factors that undo the interface's high-pass on the response, per line.
    pub(super) unhp: Option<Vec<Complex64>>,
}

impl HitCutter<'_> {
    /// `scratch` holds the records with carried-over ringing removed (reused from hit to hit).
    pub(super) fn cut(
        &self,
        plan: &mut SpectrumPlan,
        scratch: &mut [Vec<f64>; 2],
        index: usize,
        trig: usize,
        override_accept: Option<bool>,
    ) -> Cut {
        let (a, b, n, pre) = (self.a, self.b, self.rp.n, self.rp.pre);
        let q = &self.setup.quality;
        let mut rep = HitReport {
            index,
            time_s: trig as f64 * self.rp.dt,
            record_start: None,
            reasons: Vec::new(),
            override_accept,
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
            return Cut {
                report: rep,
                spectra: None,
                first_null_hz: None,
            };
        };
        rep.record_start = Some(start);
        // The next tap's pulse, in record indices, when it falls inside this record.
        let next_in_record = self
            .spans
            .get(index + 1)
            .map(|nx| nx.start.saturating_sub(start))
            .filter(|&k| k < n);
        if next_in_record.is_some() {
            rep.reasons.push(Reason::NextTapInRecord);
        }
        let first_bad = self.bad.partition_point(|&i| i < start);
        if self.bad.get(first_bad).is_some_and(|&i| i < start + n) {
            rep.reasons.push(Reason::Corrupt);
        }
        let ra = &a[start..start + n];
        let rb = &b[start..start + n];
        // Overload checks see the raw samples; the spectra see the samples with any carried-over
        // ringing removed.
        let [sa, sb] = scratch;
        let fix = |raw: &[f64], c: &Option<RingingModel>, out: &mut Vec<f64>| -> bool {
            c.as_ref().map(|c| c.subtract(raw, out)).is_some()
        };
        let fixed_a = fix(ra, &self.corr_a[index], sa);
        let fixed_b = fix(rb, &self.corr_b[index], sb);
        rep.ringing_removed = fixed_a || fixed_b;
        let [pa, pb] = self.peaks;
        rep.peak_a_fs = pa.peak_in(a, start, start + n);
        rep.peak_b_fs = pb.peak_in(b, start, start + n);
        if rep.peak_a_fs >= q.overload_fraction
            || rep.peak_b_fs >= q.overload_fraction
            || flat_top_in(ra, rep.peak_a_fs, start, pa)
            || flat_top_in(rb, rep.peak_b_fs, start, pb)
        {
            rep.reasons.push(Reason::Overload);
        }
        let ra_w: &[f64] = if fixed_a { sa } else { ra };
        let rb_w: &[f64] = if fixed_b { sb } else { rb };
        let (sa, sb) = match self.setup.layout {
            Layout::Hammer => {
                let cut = next_in_record.unwrap_or(n);
                self.hammer_spectra(plan, &mut rep, [ra, ra_w, rb_w], start, cut)
            }
            Layout::Sensor => {
                let (rp, ew) = (self.rp, &self.rp.exp_window);
                let (ma, mb) = baseline(ra_w, rb_w, pre.saturating_sub(pre / 10));
                let lines = || rp.lines.clone();
                let sa = plan.lines_of(|x| windowed(x, ra_w, ma, rp.scale_a, ew), rp.dt, lines());
                let sb = plan.lines_of(|x| windowed(x, rb_w, mb, rp.scale_b, ew), rp.dt, lines());
                (sa, sb)
            }
        };
        let mut first_null_hz = None;
        if self.setup.layout == Layout::Hammer && !rep.reasons.contains(&Reason::DoubleHit) {
            let shape = force_shape(&sa, &self.rp.freq_hz, q.rolloff_db);
            rep.force_drop_db = Some(shape.drop_db);
            rep.force_usable_hz = Some(shape.usable_hz);
            first_null_hz = Some(shape.first_null_hz);
        }
        Cut {
            report: rep,
            spectra: Some(Candidate { a: sa, b: sb }),
            first_null_hz,
        }
    }

    /// The hammer layout's spectra of one record: the force pulse measured and checked for a
    /// second impact before `strike_end` (the next tap, already its own reason, is not a
    /// rebound), the force window set around it, each channel baseline-removed, scaled to SI
    /// units and windowed in one pass straight into the FFT's input buffer. `records` holds the
    /// raw force, and the force and response with carried-over ringing removed.
    fn hammer_spectra(
        &self,
        plan: &mut SpectrumPlan,
        rep: &mut HitReport,
        [ra, ra_w, rb_w]: [&[f64]; 3],
        start: usize,
        strike_end: usize,
    ) -> (Vec<Complex64>, Vec<Complex64>) {
        let (rp, fs, n) = (self.rp, self.fs as f64, self.rp.n);
        let (dt, ew) = (rp.dt, &rp.exp_window);
        let sign = self.setup.trigger.slope.sign();
        // The file-level pulse, in record indices (clipped to the record).
        let fp = self.pulses[rep.index].expect("hammer layout locates every pulse");
        let pulse = Pulse {
            start: fp.start.max(start) - start,
            peak: fp.peak.clamp(start, start + n - 1) - start,
            end: fp.end.clamp(start, start + n - 1) - start,
            peak_value: fp.peak_value,
        };
        let width = pulse.width();
        rep.pulse_width_s = Some(width as f64 * dt);
        let strike = &ra[..strike_end.max(pulse.end + 1).min(n)];
        let double = self.setup.quality.double_hit_fraction;
        if let Some(i2) = second_impact(strike, &pulse, sign, double) {
            rep.reasons.push(Reason::DoubleHit);
            rep.second_impact_s = Some((i2 - pulse.peak) as f64 * dt);
        }
        let wstart = pulse.start.saturating_sub(width);
        let w = &self.setup.windows;
        let unity = w
            .force_unity_s
            .map(|s| (s * fs).round() as usize)
            .unwrap_or(4 * width)
            .max(1);
        let taper = w
            .force_taper_s
            .map(|s| (s * fs).round() as usize)
            .unwrap_or(width);
        rep.force_window = Some([wstart, unity, taper]);
        let (ma, mb) = baseline(ra_w, rb_w, wstart.saturating_sub(taper));
        let (lo, fw) = force_window(n, wstart, unity, taper);
        let sa = plan.lines_of(
            |x| {
                x.fill(0.0);
                for (k, w) in fw.iter().enumerate() {
                    let i = lo + k;
                    x[i] = (ra_w[i] - ma) * rp.scale_a * w * ew[i];
                }
            },
            dt,
            rp.lines.clone(),
        );
        let mut sb = plan.lines_of(
            |x| windowed(x, rb_w, mb, rp.scale_b, ew),
            dt,
            rp.lines.clone(),
        );
        if let Some(u) = &self.unhp {
            sb.iter_mut().zip(u).for_each(|(v, u)| *v *= u);
        }
        (sa, sb)
    }
}

/// `out = (raw − mean) · scale · w`.
pub(super) fn windowed(out: &mut [f64], raw: &[f64], mean: f64, scale: f64, w: &[f64]) {
    for ((o, r), w) in out.iter_mut().zip(raw).zip(w) {
        *o = (r - mean) * scale * w;
    }
}

pub(super) fn baseline(ra: &[f64], rb: &[f64], end: usize) -> (f64, f64) {
    if end < 8 {
        return (0.0, 0.0);
    }
    let m = |x: &[f64]| x[..end].iter().sum::<f64>() / end as f64;
    (m(ra), m(rb))
}

/// What a hit's force spectrum says about the tip and the band.
pub(super) struct ForceShape {
    pub(super) drop_db: f64,
    pub(super) usable_hz: f64,
    pub(super) first_null_hz: Option<f64>,
}

/// The force spectrum's in-band drop, the highest line still within `rolloff_db` of its largest
/// value, and the first null after that (a minimum 30 dB or more below the largest value with the
/// spectrum rising again after it: a half-sine's first null lies at 1.5/Tc, derived).
pub(super) fn force_shape(sa: &[Complex64], freq_hz: &[f64], rolloff_db: f64) -> ForceShape {
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

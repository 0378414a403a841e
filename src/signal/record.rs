//! The geometry of one test's records, worked out once from the setup and the sample rate:
//! length, pretrigger, line spacing, the band's lines, the exponential window and the channels'
//! scales. The station analysis and the hit traces of the window both cut records with it, so
//! they cannot disagree.

use std::ops::Range;
use std::sync::Arc;

use super::window::{exponential, exponential_tau_s, onset_taper};
use crate::setup::{Layout, Setup};

/// Records of a test at one sample rate.
#[derive(Debug, Clone, PartialEq)]
pub struct RecordPlan {
    /// Sample rate, Hz.
    pub fs: u32,
    /// Sample interval, s.
    pub dt: f64,
    /// Record length, samples.
    pub n: usize,
    /// Samples before the trigger.
    pub pre: usize,
    /// Line spacing, Hz.
    pub df: f64,
    /// The analysis band, Hz.
    pub band_hz: [f64; 2],
    /// DFT lines inside the band.
    pub lines: Range<usize>,
    /// Their frequencies, Hz.
    pub freq_hz: Vec<f64>,
    /// Time constant of the exponential window, s.
    pub tau_s: f64,
    /// The exponential window over the record (1 up to the trigger). In the sensor layout it
    /// rises from 0 over the first ⅞ of the pretrigger ([`onset_taper`]), where only noise and
    /// hum lie: that layout's auto-spectra are read directly, and a record starting at full hum
    /// leaks a comb of false peaks 1/pretrigger apart.
    pub exp_window: Arc<[f64]>,
    /// Full-scale units → engineering units, channel A.
    pub scale_a: f64,
    /// Full-scale units → engineering units, channel B.
    pub scale_b: f64,
    /// What the exponential window was built from.
    window_key: WindowKey,
}

/// Everything the exponential window depends on.
#[derive(Debug, Clone, Copy, PartialEq)]
struct WindowKey {
    n: usize,
    pre: usize,
    dt: f64,
    tau_s: f64,
    onset_taper: bool,
}

impl RecordPlan {
    /// The plan for `setup` at `fs` on recordings of `available` samples. Errors are sentences
    /// for the user (the caller names the file): a zero rate, a record longer than the recording
    /// (checked before any buffer is sized from it), a band above Nyquist or without a line.
    pub fn new(setup: &Setup, fs: u32, available: usize) -> Result<Self, String> {
        Self::new_after(setup, fs, available, None)
    }

    /// [`RecordPlan::new`], taking the exponential window from `previous` when it is the same
    /// window (a test's stations share one; building it is a pass over the record).
    pub fn new_after(
        setup: &Setup,
        fs: u32,
        available: usize,
        previous: Option<&RecordPlan>,
    ) -> Result<Self, String> {
        if fs == 0 {
            return Err("the recording's sample rate is 0 Hz".into());
        }
        let n = setup.record_samples(fs);
        if n > available {
            return Err(format!(
                "the record of {n} samples ({:.3} s) is longer than the whole recording ({} \
                 samples, {:.3} s): choose a shorter record length",
                n as f64 / fs as f64,
                available,
                available as f64 / fs as f64
            ));
        }
        let dt = 1.0 / fs as f64;
        let df = fs as f64 / n as f64;
        let pre = ((setup.trigger.pretrigger_fraction * n as f64).round() as usize).min(n - 1);
        let [lo, hi] = setup.band(fs);
        let nyquist = fs as f64 / 2.0;
        if hi > nyquist {
            // Clipping it quietly would report a band the recording cannot hold.
            return Err(format!(
                "the band's upper edge {hi} Hz lies above the Nyquist frequency {nyquist} Hz of \
                 this recording ({fs} Hz sampling); choose a band up to about {:.0} Hz",
                0.45 * fs as f64
            ));
        }
        let k_lo = (lo / df).ceil().max(1.0) as usize;
        let k_hi = ((hi / df).floor() as usize).min(n / 2);
        if k_lo > k_hi {
            return Err(format!(
                "the band {lo}:{hi} Hz holds no spectral line at {df:.4} Hz spacing"
            ));
        }
        let lines = k_lo..k_hi + 1;
        let freq_hz = lines.clone().map(|k| k as f64 * df).collect();
        let tau_s = exponential_tau_s((n - pre) as f64 * dt, setup.windows.exponential_end);
        let window_key = WindowKey {
            n,
            pre,
            dt,
            tau_s,
            onset_taper: setup.layout == Layout::Sensor,
        };
        Ok(Self {
            fs,
            dt,
            n,
            pre,
            df,
            band_hz: [lo, hi],
            lines,
            freq_hz,
            tau_s,
            exp_window: match previous {
                Some(p) if p.window_key == window_key => p.exp_window.clone(),
                _ => {
                    let mut w = exponential(n, pre, dt, tau_s);
                    if setup.layout == Layout::Sensor {
                        onset_taper(&mut w, pre - pre / 8);
                    }
                    w.into()
                }
            },
            window_key,
            scale_a: setup.full_scale_volts / setup.channel_a.sensitivity.volts_per_unit(),
            scale_b: setup.full_scale_volts / setup.channel_b.sensitivity.volts_per_unit(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Line spacing Δf = fs/N (any DSP text, e.g. Bendat & Piersol 2010 §11.2).
    #[test]
    fn lines_and_spacing_follow_the_record() {
        let mut s = Setup::default();
        s.trigger.record_length_s = Some(0.5);
        s.band_hz = Some([10.0, 1000.0]);
        let p = RecordPlan::new(&s, 8000, 10_000).unwrap();
        assert_eq!(p.n, 4000);
        assert!((p.df - 2.0).abs() < 1e-12);
        assert_eq!(p.lines, 5..501);
        assert_eq!(p.freq_hz.len(), 496);
        assert!(
            RecordPlan::new(&s, 8000, 3999)
                .unwrap_err()
                .contains("longer than")
        );
        assert!(RecordPlan::new(&s, 0, 10_000).is_err());
        s.band_hz = Some([10.0, 5000.0]);
        assert!(
            RecordPlan::new(&s, 8000, 10_000)
                .unwrap_err()
                .contains("Nyquist")
        );
    }
}

//! The test setup: layout, channels, trigger, windows, band and quality limits.
//!
//! One `Setup` drives every stage; it is saved in a session's manifest and echoed in
//! `result.json` so a result always says how it was made.

use serde::{Deserialize, Serialize};

use crate::units::{Quantity, Sensitivity};

/// How the test is laid out.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Layout {
    /// Roving hammer: channel A = force at the station hit, channel B = accelerometer fixed at the
    /// reference station. FRF = accelerance H(ref, j) = H(j, ref) by reciprocity.
    #[default]
    Hammer,
    /// Roving accelerometer against a fixed reference accelerometer, force not measured:
    /// channel A = reference, channel B = roving sensor at station j. FRF = transmissibility
    /// T(j, ref) = G(ref, j) / G(ref, ref).
    Sensor,
}

impl Layout {
    /// Quantity carried by channel A (excitation or reference).
    pub fn channel_a_quantity(self) -> Quantity {
        match self {
            Layout::Hammer => Quantity::Force,
            Layout::Sensor => Quantity::Acceleration,
        }
    }

    /// Unit of the FRF this layout produces.
    pub fn frf_unit(self) -> &'static str {
        match self {
            Layout::Hammer => "(m/s²)/N",
            Layout::Sensor => "1",
        }
    }
}

/// FRF estimator.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Estimator {
    /// H1 = G_ab / G_aa: noise on the response (the usual impact choice).
    #[default]
    H1,
    /// H2 = G_bb / G_ba: noise on the input.
    H2,
    /// Hv: SISO total least squares, between H1 and H2 (depends on channel scaling).
    Hv,
}

/// Trigger slope on channel A.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Slope {
    /// Trigger when the signal rises through +level.
    #[default]
    Rising,
    /// Trigger when the signal falls through −level.
    Falling,
}

impl Slope {
    /// +1 for rising, −1 for falling: multiplies samples so a hit is always a positive pulse.
    pub fn sign(self) -> f64 {
        match self {
            Slope::Rising => 1.0,
            Slope::Falling => -1.0,
        }
    }
}

/// How the trigger level is set.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind", content = "value")]
pub enum TriggerLevel {
    /// A fraction of digital full scale (0.02 = 2 % of range).
    FractionOfRange(f64),
    /// A multiple of the channel's robust noise rms (median absolute deviation × 1.4826).
    NoiseMultiple(f64),
}

impl Default for TriggerLevel {
    fn default() -> Self {
        TriggerLevel::FractionOfRange(0.02)
    }
}

/// Trigger and record cutting.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Trigger {
    /// Level rule.
    pub level: TriggerLevel,
    /// Slope.
    pub slope: Slope,
    /// Fraction of the record kept before the trigger (0.1 = 10 %).
    pub pretrigger_fraction: f64,
    /// Record length in seconds; `None` = the next power of two ≥ 1 s of samples.
    pub record_length_s: Option<f64>,
    /// Dead time after a trigger; `None` = the post-trigger part of the record.
    pub holdoff_s: Option<f64>,
}

impl Default for Trigger {
    fn default() -> Self {
        Self {
            level: TriggerLevel::default(),
            slope: Slope::Rising,
            pretrigger_fraction: 0.10,
            record_length_s: None,
            holdoff_s: None,
        }
    }
}

/// Windows applied to each record.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Windows {
    /// Unity part of the force window in seconds, starting one pulse width before the pulse;
    /// `None` = 4 × the detected pulse width. Used in the hammer layout only.
    pub force_unity_s: Option<f64>,
    /// Cosine taper on each side of the force window, seconds; `None` = one pulse width.
    pub force_taper_s: Option<f64>,
    /// Value the exponential window reaches at the record end (0.01 = 1 %); 1.0 = no window.
    pub exponential_end: f64,
}

impl Default for Windows {
    fn default() -> Self {
        Self {
            force_unity_s: None,
            force_taper_s: None,
            exponential_end: 0.01,
        }
    }
}

/// The audio interface's AC coupling (a first-order high-pass on every channel).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case", tag = "kind", content = "corner_hz")]
pub enum AcCoupling {
    /// Estimate the corner from the hammer channel's tail after the pulses (hammer layout).
    #[default]
    Auto,
    /// Leave the FRF as measured.
    None,
    /// A known corner frequency, Hz.
    CornerHz(f64),
}

/// Per-hit quality limits (field notes §1; common practice).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct QualityLimits {
    /// Any sample at or above this fraction of full scale is an overload.
    pub overload_fraction: f64,
    /// A channel-A peak below this fraction of full scale is weak.
    pub weak_fraction: f64,
    /// A second excursion above this fraction of the pulse peak, after the pulse has fallen below
    /// 5 % of its peak, is a double hit.
    pub double_hit_fraction: f64,
    /// Largest in-band drop of the force auto-spectrum, dB, before the tip is called too soft.
    pub rolloff_db: f64,
    /// A hit is an outlier when more than this fraction of its response energy is not explained
    /// by the FRF of the station's other hits (and it stands clearly apart from them).
    pub outlier_max_residual: f64,
}

impl Default for QualityLimits {
    fn default() -> Self {
        Self {
            overload_fraction: 0.98,
            weak_fraction: 0.10,
            double_hit_fraction: 0.10,
            rolloff_db: 20.0,
            outlier_max_residual: 0.10,
        }
    }
}

/// One input channel.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Channel {
    /// Index of the channel in the recording (0-based).
    pub index: usize,
    /// Sensitivity in mV per SI unit.
    pub sensitivity: Sensitivity,
}

/// The whole setup.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Setup {
    /// Test layout.
    pub layout: Layout,
    /// Channel A: hammer force (hammer layout) or reference accelerometer (sensor layout).
    pub channel_a: Channel,
    /// Channel B: response accelerometer (hammer: at the reference; sensor: roving).
    pub channel_b: Channel,
    /// Volts at digital full scale (±1.0).
    pub full_scale_volts: f64,
    /// Station of the fixed accelerometer, when known.
    pub reference_station: Option<u32>,
    /// Station spacing used for positions when no `stations.csv` is given, metres.
    pub spacing_m: f64,
    /// Trigger and record.
    pub trigger: Trigger,
    /// Windows.
    pub windows: Windows,
    /// Analysis band `[low, high]` in Hz; `None` = 10 Hz to min(5 kHz, 0.45 fs).
    pub band_hz: Option<[f64; 2]>,
    /// FRF estimator.
    pub estimator: Estimator,
    /// Quality limits.
    pub quality: QualityLimits,
    /// Model and remove ringing carried over from earlier hits (see `signal::carryover`).
    pub remove_carryover: bool,
    /// AC coupling to undo in the hammer layout (see `signal::coupling`).
    pub ac_coupling: AcCoupling,
}

impl Default for Setup {
    fn default() -> Self {
        Self {
            layout: Layout::Hammer,
            channel_a: Channel {
                index: 0,
                sensitivity: Sensitivity::mv_per_unit(1000.0),
            },
            channel_b: Channel {
                index: 1,
                sensitivity: Sensitivity::mv_per_unit(1000.0),
            },
            full_scale_volts: 1.0,
            reference_station: None,
            spacing_m: 0.1,
            trigger: Trigger::default(),
            windows: Windows::default(),
            band_hz: None,
            estimator: Estimator::H1,
            quality: QualityLimits::default(),
            remove_carryover: true,
            ac_coupling: AcCoupling::Auto,
        }
    }
}

impl Setup {
    /// Record length in samples at `fs`: the configured length, or the next power of two ≥ 1 s.
    pub fn record_samples(&self, sample_rate_hz: u32) -> usize {
        match self.trigger.record_length_s {
            Some(s) => ((s * sample_rate_hz as f64).round() as usize).max(16),
            None => (sample_rate_hz as usize).next_power_of_two(),
        }
    }

    /// Analysis band in Hz at `fs`.
    pub fn band(&self, sample_rate_hz: u32) -> [f64; 2] {
        self.band_hz
            .unwrap_or([10.0, (0.45 * sample_rate_hz as f64).min(5000.0)])
    }

    /// Checks ranges; returns a sentence naming the bad setting.
    pub fn validate(&self) -> Result<(), String> {
        let t = &self.trigger;
        if !(0.0..0.9).contains(&t.pretrigger_fraction) {
            return Err(format!(
                "pretrigger fraction {} must be in [0, 0.9)",
                t.pretrigger_fraction
            ));
        }
        if let Some(r) = t.record_length_s
            && !(r.is_finite() && r > 0.0)
        {
            return Err(format!("record length {r} s must be positive"));
        }
        if let Some(h) = t.holdoff_s
            && !(h.is_finite() && h >= 0.0)
        {
            return Err(format!("hold-off {h} s must be zero or positive"));
        }
        match t.level {
            TriggerLevel::FractionOfRange(f) if !(f > 0.0 && f < 1.0) => {
                return Err(format!(
                    "trigger level {f} must be a fraction of range in (0, 1)"
                ));
            }
            TriggerLevel::NoiseMultiple(k) if !(k.is_finite() && k > 0.0) => {
                return Err(format!("trigger noise multiple {k} must be positive"));
            }
            _ => {}
        }
        if !(self.full_scale_volts.is_finite() && self.full_scale_volts > 0.0) {
            return Err(format!(
                "full-scale volts {} must be positive",
                self.full_scale_volts
            ));
        }
        let e = self.windows.exponential_end;
        if !(e > 0.0 && e <= 1.0) {
            return Err(format!(
                "exponential window end value {e} must be in (0, 1]"
            ));
        }
        if let Some([lo, hi]) = self.band_hz
            && !(lo >= 0.0 && hi > lo && hi.is_finite())
        {
            return Err(format!("band {lo}:{hi} Hz must satisfy 0 ≤ low < high"));
        }
        if self.channel_a.index == self.channel_b.index {
            return Err(format!(
                "channels A and B are both index {}",
                self.channel_a.index
            ));
        }
        if !(self.spacing_m.is_finite() && self.spacing_m > 0.0) {
            return Err(format!(
                "station spacing {} m must be positive",
                self.spacing_m
            ));
        }
        Ok(())
    }
}

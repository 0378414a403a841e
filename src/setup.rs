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

/// Per-hit quality limits (Brown, Allemang & Phillips 2015; common practice).
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

    /// Checks every value against its physical range (lower and upper bounds, finite); returns
    /// a sentence naming the bad setting. Values from a file, the command line and the window all
    /// pass here before any size is computed from them.
    pub fn validate(&self) -> Result<(), String> {
        let t = &self.trigger;
        if !(0.0..0.9).contains(&t.pretrigger_fraction) {
            return Err(format!(
                "pretrigger fraction {} must be in [0, 0.9)",
                t.pretrigger_fraction
            ));
        }
        if let Some(r) = t.record_length_s {
            within("record length", r, 1e-3, MAX_RECORD_S, "s")?;
        }
        if let Some(h) = t.holdoff_s {
            within("hold-off", h, 0.0, MAX_RECORD_S, "s")?;
        }
        match t.level {
            TriggerLevel::FractionOfRange(f) if !(f > 0.0 && f < 1.0) => {
                return Err(format!(
                    "trigger level {f} must be a fraction of range in (0, 1)"
                ));
            }
            TriggerLevel::NoiseMultiple(k) => within("trigger noise multiple", k, 1e-3, 1e6, "")?,
            _ => {}
        }
        within("full-scale volts", self.full_scale_volts, 1e-6, 1e4, "V")?;
        for (name, c) in [("A", &self.channel_a), ("B", &self.channel_b)] {
            within(
                &format!("channel {name} sensitivity"),
                c.sensitivity.mv_per_unit,
                1e-9,
                1e9,
                "mV per unit",
            )?;
            if c.index > MAX_CHANNEL_INDEX {
                return Err(format!(
                    "channel {name} index {} is beyond any audio interface (at most {MAX_CHANNEL_INDEX})",
                    c.index
                ));
            }
        }
        let e = self.windows.exponential_end;
        if !(e > 0.0 && e <= 1.0) {
            return Err(format!(
                "exponential window end value {e} must be in (0, 1]"
            ));
        }
        if let Some(u) = self.windows.force_unity_s {
            within("force window length", u, 0.0, MAX_RECORD_S, "s")?;
        }
        if let Some(u) = self.windows.force_taper_s {
            within("force window taper", u, 0.0, MAX_RECORD_S, "s")?;
        }
        if let Some([lo, hi]) = self.band_hz {
            within("band low edge", lo, 0.0, MAX_BAND_HZ, "Hz")?;
            within("band high edge", hi, 0.0, MAX_BAND_HZ, "Hz")?;
            if hi <= lo {
                return Err(format!("band {lo}:{hi} Hz must satisfy 0 ≤ low < high"));
            }
        }
        if self.channel_a.index == self.channel_b.index {
            return Err(format!(
                "channels A and B are both index {}",
                self.channel_a.index
            ));
        }
        within("station spacing", self.spacing_m, 1e-5, 1000.0, "m")?;
        if let AcCoupling::CornerHz(f) = self.ac_coupling {
            within("AC-coupling corner", f, 1e-4, 1000.0, "Hz")?;
        }
        let q = &self.quality;
        within("overload fraction", q.overload_fraction, 0.01, 1.0, "")?;
        within("weak-hit fraction", q.weak_fraction, 0.0, 1.0, "")?;
        within("double-hit fraction", q.double_hit_fraction, 0.0, 1.0, "")?;
        within("roll-off limit", q.rolloff_db, 0.1, 200.0, "dB")?;
        within("outlier residual", q.outlier_max_residual, 0.0, 1.0, "")?;
        Ok(())
    }
}

/// The longest record, hold-off or window accepted, s: a minute holds the ring-down of any bench
/// part (ζ = 0.01 % at 20 Hz decays by e in 80 s — but no one records that tap by tap).
pub const MAX_RECORD_S: f64 = 60.0;
/// The highest band edge accepted, Hz (above any audio interface's Nyquist frequency).
pub const MAX_BAND_HZ: f64 = 1e6;
/// The highest channel index accepted (0-based).
pub const MAX_CHANNEL_INDEX: usize = 1023;

/// `value` finite and inside `[lo, hi]`, else a sentence naming it.
fn within(name: &str, value: f64, lo: f64, hi: f64, unit: &str) -> Result<(), String> {
    if value.is_finite() && (lo..=hi).contains(&value) {
        return Ok(());
    }
    let unit = if unit.is_empty() {
        String::new()
    } else {
        format!(" {unit}")
    };
    if !value.is_finite() {
        return Err(format!("{name} is not a number ({value})"));
    }
    let show = crate::units::show;
    Err(format!(
        "{name} {}{unit} is out of range: give {}{unit} to {}{unit}",
        show(value),
        show(lo),
        show(hi)
    ))
}

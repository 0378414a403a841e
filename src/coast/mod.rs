//! A run-up or coast-down recorded on two channels — a tach pulse and an accelerometer — tracked
//! against speed: 1× and 2× (any order) amplitude and phase per revolution, critical speeds with
//! their amplification factor, subsynchronous whirl. Advisory; the machine runs while it is
//! recorded, so the cautions of the trade apply (guards on, clear of rotating parts).

pub mod findings;
pub mod tach;
pub mod track;

use std::path::Path;

use serde::Serialize;

use crate::acquire::InputError;
use findings::{CriticalSpeed, Subsynchronous};
use track::{OrderPoint, Quantity};

/// How to read the recording.
#[derive(Debug, Clone, PartialEq)]
pub struct RunOptions {
    /// Channel of the tach (0-based).
    pub tach_channel: usize,
    /// Channel of the vibration sensor.
    pub channel: usize,
    /// Sensor sensitivity, mV per m/s² (`None`: the samples are taken as m/s² at full scale 1).
    pub sensitivity_mv_per_unit: Option<f64>,
    /// Volts at digital full scale.
    pub full_scale_volts: f64,
    /// Tach pulses per revolution.
    pub pulses_per_rev: usize,
    /// Orders to track.
    pub orders: Vec<u32>,
    /// Quantity of the amplitudes.
    pub quantity: Quantity,
    /// First-order AC-coupling corner of the vibration input to undo, Hz (0: none).
    pub ac_corner_hz: f64,
}

impl Default for RunOptions {
    fn default() -> Self {
        Self {
            tach_channel: 0,
            channel: 1,
            sensitivity_mv_per_unit: None,
            full_scale_volts: 1.0,
            pulses_per_rev: 1,
            orders: vec![1, 2],
            quantity: Quantity::Acceleration,
            ac_corner_hz: 0.0,
        }
    }
}

/// Direction of the run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum Direction {
    /// Speed falling.
    #[serde(rename = "coast-down")]
    CoastDown,
    /// Speed rising.
    #[serde(rename = "run-up")]
    RunUp,
}

impl Direction {
    /// "coast-down" or "run-up".
    pub fn word(self) -> &'static str {
        match self {
            Direction::CoastDown => "coast-down",
            Direction::RunUp => "run-up",
        }
    }
}

/// What a run gave.
#[derive(Debug, Clone, Serialize)]
pub struct RunResult {
    /// Lowest and highest speed, rpm.
    pub speed_range_rpm: [f64; 2],
    /// Run-up or coast-down.
    pub direction: Direction,
    /// Critical speeds found, ascending.
    pub critical_speeds: Vec<CriticalSpeed>,
    /// Subsynchronous components.
    pub subsynchronous: Vec<Subsynchronous>,
    /// What a person should know.
    pub warnings: Vec<String>,
    /// Unit of the amplitudes.
    pub amplitude_unit: &'static str,
    /// Quantity of the amplitudes.
    #[serde(skip)]
    pub quantity: Quantity,
    /// Revolutions tracked.
    pub revolutions: usize,
    /// Per order: the order and its points (not written to result.json).
    #[serde(skip)]
    pub tracks: Vec<(u32, Vec<OrderPoint>)>,
    /// Order spectra of blocks of 16 revolutions (for the waterfall).
    #[serde(skip)]
    pub spectra: Vec<track::OrderSpectrum>,
}

/// Revolutions per order-spectrum block.
pub const REVS_PER_BLOCK: usize = 16;

/// Reads and tracks a run recording.
pub fn analyse_run(path: &Path, o: &RunOptions) -> Result<RunResult, InputError> {
    if o.tach_channel == o.channel {
        return Err(InputError::new(
            path,
            "the tach and the vibration must be on different channels",
        ));
    }
    let info = crate::acquire::wav::probe(path)?;
    if info.channels < 2 {
        return Err(InputError::new(
            path,
            format!(
                "has {} channel: a run needs two (tach and vibration)",
                info.channels
            ),
        ));
    }
    for (name, c) in [("tach", o.tach_channel), ("vibration", o.channel)] {
        if c >= info.channels {
            return Err(InputError::new(
                path,
                format!(
                    "has {} channels: no channel {c} for the {name}",
                    info.channels
                ),
            ));
        }
    }
    let two = crate::acquire::wav::read_two_channels(path, o.tach_channel, o.channel)?;
    let fs = f64::from(two.info.sample_rate_hz);
    let revs = tach::revolutions(&two.a, fs, o.pulses_per_rev)
        .map_err(|e| InputError::new(path, format!("channel {}: {e}", o.tach_channel)))?;
    // Full-scale units to m/s²: volts, then the sensitivity.
    let scale = match o.sensitivity_mv_per_unit {
        Some(mv) if mv > 0.0 && mv.is_finite() => o.full_scale_volts * 1000.0 / mv,
        Some(mv) => {
            return Err(InputError::new(
                path,
                format!("sensitivity {mv} mV per unit must be positive"),
            ));
        }
        None => 1.0,
    };
    let x: Vec<f64> = two.b.iter().map(|v| v * scale).collect();
    let tracks = track::track(&x, fs, &revs.start_s, &o.orders, o.quantity, o.ac_corner_hz);
    let speeds: Vec<f64> = revs
        .start_s
        .windows(2)
        .map(|w| 60.0 / (w[1] - w[0]))
        .collect();
    // The range from a running median of five revolutions: one jittery edge makes one short
    // and one long revolution, not a new top speed.
    let smooth: Vec<f64> = (0..speeds.len())
        .map(|i| {
            let mut w: Vec<f64> = speeds[i.saturating_sub(2)..(i + 3).min(speeds.len())].to_vec();
            w.sort_by(f64::total_cmp);
            w[w.len() / 2]
        })
        .collect();
    let lo = smooth.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = smooth.iter().copied().fold(0.0, f64::max);
    // Direction by the trend: mean speed of the last quarter against the first.
    let q = (speeds.len() / 4).max(1);
    let first: f64 = speeds[..q].iter().sum::<f64>() / q as f64;
    let last: f64 = speeds[speeds.len() - q..].iter().sum::<f64>() / q as f64;
    let direction = if last < first {
        Direction::CoastDown
    } else {
        Direction::RunUp
    };
    let mut warnings = revs.warnings.clone();
    let mut critical_speeds = Vec::new();
    for (k, &ord) in o.orders.iter().enumerate() {
        critical_speeds.extend(findings::criticals(ord, &tracks[k]));
    }
    critical_speeds.sort_by(|a, b| a.speed_rpm.total_cmp(&b.speed_rpm));
    // A higher order peaking where a lower one has its critical speed, far smaller, is the lower
    // order leaking (its amplitude changes within a revolution there), not a resonance.
    let all = critical_speeds.clone();
    critical_speeds.retain(|c| {
        !all.iter().any(|l| {
            l.order < c.order
                && (l.speed_rpm - c.speed_rpm).abs() < 2.0 * (l.n2_rpm - l.n1_rpm)
                && c.peak_amplitude < 0.1 * l.peak_amplitude
        })
    });
    // The same leakage where no 1× critical was kept (a fast sweep's ringing): a higher-order
    // peak no larger than twice the 1× vector's typical change from one revolution to the next
    // at that speed cannot be told from it.
    if let Some(k1) = o.orders.iter().position(|&n| n == 1) {
        let one = &tracks[k1];
        critical_speeds.retain(|c| {
            if c.order == 1 {
                return true;
            }
            let mut steps: Vec<f64> = one
                .windows(2)
                .filter(|w| (w[0].speed_rpm / c.speed_rpm - 1.0).abs() < 0.005)
                .map(|w| (w[1].vector - w[0].vector).norm())
                .collect();
            if steps.is_empty() {
                return true;
            }
            steps.sort_by(f64::total_cmp);
            let keep = c.peak_amplitude > 2.0 * steps[steps.len() / 2];
            if !keep {
                warnings.push(format!(
                    "a {}× peak at {:.0} rpm is no larger than the 1× changes from one revolution \
                     to the next there: leakage of the 1×, not taken as a critical speed",
                    c.order, c.speed_rpm
                ));
            }
            keep
        });
    }
    // A peak narrower than a resonance can look at this sweep rate is not one: swept through at
    // Ω̇ a mode's apparent half-power width grows like √Ω̇ (the response cannot build up in
    // less time), so Ω̇/(ζω)² from the apparent width stays of order one; far above that, the
    // peak is a beat of ringing left behind, or interference.
    const MOST_SWEEP: f64 = 3.0;
    critical_speeds.retain(|c| {
        let keep = c.sweep_parameter <= MOST_SWEEP;
        if !keep {
            warnings.push(format!(
                "a {}× peak at {:.0} rpm is narrower than a resonance can look at this sweep rate \
                 (Ω̇/(ζω)² = {:.1} from its width): ringing left behind or interference, not \
                 taken as a critical speed; run slower to measure it",
                c.order, c.speed_rpm, c.sweep_parameter
            ));
        }
        keep
    });
    // Nothing found, yet the 1× peaks well above its run: say so rather than stay silent.
    if let Some(k1) = o.orders.iter().position(|&n| n == 1)
        && !critical_speeds.iter().any(|c| c.order == 1)
    {
        let b = findings::bode(&tracks[k1]);
        let amp: Vec<f64> = b.vectors.iter().map(|v| v.norm()).collect();
        if let Some(i) = (0..amp.len()).max_by(|&x, &y| amp[x].total_cmp(&amp[y])) {
            let mut sorted = amp.clone();
            sorted.sort_by(f64::total_cmp);
            let median = sorted[sorted.len() / 2];
            if amp[i] > 3.0 * median {
                warnings.push(format!(
                    "the 1× peaks at {:.0} rpm ({:.0}× its median) but does not read as a \
                     resonance (half-power points, a lag change of 100–270°): a sweep too fast \
                     for the damping, or a disturbed run — look at the Bode plot",
                    b.speeds[i],
                    amp[i] / median.max(f64::MIN_POSITIVE)
                ));
            }
        }
    }
    for c in &critical_speeds {
        if c.sweep_parameter > 0.1 {
            warnings.push(format!(
                "at {:.0} rpm the speed changes too fast for a fair AF (Ω̇/(ζω_n)² = {:.2} > \
                 0.1): the peak is moved and the AF lowered; run slower or take the phase-slope AF",
                c.speed_rpm, c.sweep_parameter
            ));
        }
    }
    // A pulse train on the vibration channel (the inputs swapped, or the tach cabled to both):
    // its harmonics are as large as its 1× all through the run, which vibration rarely is.
    if let (Some(k1), Some(k2)) = (
        o.orders.iter().position(|&n| n == 1),
        o.orders.iter().position(|&n| n == 2),
    ) {
        let mut ratios: Vec<f64> = tracks[k1]
            .iter()
            .zip(&tracks[k2])
            .filter(|(a, _)| a.vector.norm() > 0.0)
            .map(|(a, b)| b.vector.norm() / a.vector.norm())
            .collect();
        if !ratios.is_empty() {
            ratios.sort_by(f64::total_cmp);
            if ratios[ratios.len() / 2] > 0.6 {
                warnings.push(format!(
                    "channel {} looks like a pulse train (its 2× is {:.0} % of its 1× through the \
                     run): are the tach and the vibration inputs swapped?",
                    o.channel,
                    100.0 * ratios[ratios.len() / 2]
                ));
            }
        }
    }
    if hi > 0.0 && lo > 0.2 * hi {
        warnings.push(
            "the run does not reach slow roll (below a fifth of its top speed): amplitudes \
             include runout"
                .into(),
        );
    }
    let spectra = track::order_spectra(&x, fs, &revs.start_s, REVS_PER_BLOCK);
    let subsynchronous = findings::subsynchronous(&spectra);
    Ok(RunResult {
        speed_range_rpm: [lo, hi],
        direction,
        critical_speeds,
        subsynchronous,
        warnings,
        amplitude_unit: o.quantity.unit(),
        quantity: o.quantity,
        revolutions: speeds.len(),
        tracks: o.orders.iter().copied().zip(tracks).collect(),
        spectra,
    })
}

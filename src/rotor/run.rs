//! One call from a rotor to everything asked of it at speed: Campbell diagram with critical
//! speeds and stability threshold, unbalance response with its peaks and margins, and the
//! bearings' coefficients over the range — what the CLI, the window and the report all show.

use serde::Serialize;

use super::bearing::Coefficients;
use super::campbell::{Campbell, campbell, speed_grid};
use super::file::RotorFile;
use super::unbalance::{Peak, ResponsePoint, peaks, response};
use crate::model::beam::BeamTheory;
use crate::model::margin::MarginRule;

/// What to compute.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AtSpeedOptions {
    /// Lowest and highest speed, rpm.
    pub speeds_rpm: [f64; 2],
    /// Speeds in the sweep.
    pub count: usize,
    /// Whirl modes tracked.
    pub modes: usize,
    /// Elements over the shaft's length.
    pub elements: usize,
}

impl AtSpeedOptions {
    /// 0 to 2.5 × the top of the operating range (else 10 000 rpm): wide enough to show the first
    /// critical speeds above the range as well as those within its margins; 101 speeds, 8 modes,
    /// 40 elements.
    pub fn for_range(range: Option<[f64; 2]>) -> Self {
        Self {
            speeds_rpm: [0.0, range.map_or(10_000.0, |r| 2.5 * r[1])],
            count: 101,
            modes: 8,
            elements: 40,
        }
    }
}

/// A response peak with the margin the rule asks for against the operating range.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PeakMargin {
    /// The peak.
    #[serde(flatten)]
    pub peak: Peak,
    /// Separation margin the rule asks for, %.
    pub required_margin_pct: Option<f64>,
    /// Separation margin there is, % (0 inside the range).
    pub actual_margin_pct: Option<f64>,
    /// The margin holds.
    pub clear: Option<bool>,
}

/// Everything computed at speed.
#[derive(Debug, Clone)]
pub struct AtSpeed {
    /// Campbell diagram, critical speeds, threshold (with the tracked mode shapes).
    pub campbell: Campbell,
    /// Speeds of the sweep, rpm.
    pub speeds_rpm: Vec<f64>,
    /// Positions where the response is given, m.
    pub positions_m: Vec<f64>,
    /// Response on a finer speed grid (empty without unbalance).
    pub response: Vec<ResponsePoint>,
    /// Response peaks with margins.
    pub peaks: Vec<PeakMargin>,
    /// Each bearing's coefficients at each sweep speed.
    pub coefficients: Vec<Vec<Coefficients>>,
    /// Bearing positions, m.
    pub bearings_m: Vec<f64>,
    /// Node positions of the model, m.
    pub nodes_m: Vec<f64>,
    /// Operating range, rpm.
    pub operating_range_rpm: Option<[f64; 2]>,
}

/// Solves `file` at speed.
pub fn at_speed(file: &RotorFile, o: &AtSpeedOptions) -> Result<AtSpeed, String> {
    let [lo, hi] = o.speeds_rpm;
    let model = file
        .rotor
        .assemble(BeamTheory::Timoshenko, o.elements, &[])?;
    let speeds = speed_grid(lo, hi, o.count);
    let c = campbell(&model, &speeds, o.modes)?;
    let coefficients = speeds
        .iter()
        .map(|&n| model.bearing_coefficients(n))
        .collect::<Result<Vec<_>, _>>()?;
    let mut positions: Vec<f64> = file
        .rotor
        .bearings
        .iter()
        .map(|b| b.position_m)
        .chain(file.rotor.unbalances.iter().map(|u| u.position_m))
        .chain(file.rotor.shaft.discs.iter().map(|d| d.position_m))
        .collect();
    positions.sort_by(f64::total_cmp);
    positions.dedup_by(|x, y| (*x - *y).abs() < 1e-9);
    let mut pts = Vec::new();
    let mut peak_lines = Vec::new();
    if !file.rotor.unbalances.is_empty() {
        // Finer than the eigen sweep: a lightly damped peak is narrow (half-power width ≈ 2ζN).
        let fine = speed_grid(lo.max(hi * 1e-3), hi, (4 * o.count).max(801));
        pts = response(&model, &file.rotor.unbalances, &fine, &positions)?;
        let rule = MarginRule::default();
        for &x in &positions {
            let curve: Vec<&ResponsePoint> = pts.iter().filter(|p| p.position_m == x).collect();
            let sp: Vec<f64> = curve.iter().map(|p| p.speed_rpm).collect();
            let am: Vec<f64> = curve.iter().map(|p| p.amplitude_m).collect();
            for pk in peaks(x, &sp, &am) {
                let (req, act, clear) = match (file.operating_range_rpm, pk.amplification_factor) {
                    (Some([rlo, rhi]), Some(af)) => {
                        let (req, act) = if pk.speed_rpm < rlo {
                            (rule.below_pct(af), 100.0 * (rlo - pk.speed_rpm) / rlo)
                        } else if pk.speed_rpm > rhi {
                            (rule.above_pct(af), 100.0 * (pk.speed_rpm - rhi) / rhi)
                        } else {
                            (rule.below_pct(af).max(rule.above_pct(af)), 0.0)
                        };
                        (Some(req), Some(act), Some(act >= req))
                    }
                    _ => (None, None, None),
                };
                peak_lines.push(PeakMargin {
                    peak: pk,
                    required_margin_pct: req,
                    actual_margin_pct: act,
                    clear,
                });
            }
        }
    }
    Ok(AtSpeed {
        campbell: c,
        speeds_rpm: speeds,
        positions_m: positions,
        response: pts,
        peaks: peak_lines,
        coefficients,
        bearings_m: file.rotor.bearings.iter().map(|b| b.position_m).collect(),
        nodes_m: model.nodes_m.clone(),
        operating_range_rpm: file.operating_range_rpm,
    })
}

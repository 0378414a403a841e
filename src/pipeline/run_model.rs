//! A measured run against the rotor model: the model's forward 1× critical speeds over the
//! run's range beside the measured ones, and the model's unbalance response at the sensor's
//! place fitted to the measured 1× vectors by one complex factor (the unbalance's size and
//! angle are what a run does not know) — how far the measured Bode curve has the model's shape.

use serde::Serialize;

use crate::Complex64;
use crate::coast::RunResult;
use crate::coast::findings::bode;
use crate::coast::track::Quantity;
use crate::model::beam::BeamTheory;
use crate::rotor::file::RotorFile;
use crate::rotor::model::{DEFAULT_ELEMENTS, Unbalance};

/// A measured critical speed against the nearest predicted one.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ComparedCritical {
    /// Measured, rpm.
    pub measured_rpm: f64,
    /// Predicted, rpm.
    pub predicted_rpm: f64,
    /// (predicted − measured) / measured, %.
    pub difference_pct: f64,
}

/// The model's unbalance response fitted to the measured 1× vectors.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ResponseFit {
    /// Where the model's response is taken (the sensor's place), m.
    pub position_m: f64,
    /// The unbalance the model was driven with, in words.
    pub unbalance: String,
    /// Speeds compared, rpm.
    pub speeds_rpm: Vec<f64>,
    /// Measured 1× amplitude (averaged), the run's quantity in SI units.
    pub measured_amplitude: Vec<f64>,
    /// Model amplitude times the fitted factor, same units.
    pub predicted_amplitude: Vec<f64>,
    /// Measured 1× lag, degrees (0–360).
    pub measured_lag_deg: Vec<f64>,
    /// Model lag plus the fitted angle, degrees (0–360).
    pub predicted_lag_deg: Vec<f64>,
    /// Size of the fitted factor (a multiple of the model's unbalance).
    pub scale: f64,
    /// Angle of the fitted factor, degrees (a lag added to the model's).
    pub angle_deg: f64,
    /// √(Σ|measured − fitted|² / Σ|measured|²), %: 0 when the shapes agree.
    pub residual_pct: f64,
}

/// The rotor model's view of a run.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RunModel {
    /// Forward 1× critical speeds the model predicts within the run's range, rpm.
    pub critical_speeds_rpm: Vec<f64>,
    /// Each measured 1× critical speed against the nearest predicted one.
    pub comparison: Vec<ComparedCritical>,
    /// The unbalance response fitted to the measured 1× vectors.
    pub response: Option<ResponseFit>,
}

/// Most speeds at which the model's response is solved.
const MAX_SPEEDS: usize = 150;

/// Compares `run` with `file`'s model; the response is taken at `sensor_position_m` (default:
/// the first bearing, where a housing accelerometer sits).
pub fn compare(
    file: &RotorFile,
    run: &RunResult,
    sensor_position_m: Option<f64>,
) -> Result<RunModel, String> {
    let [lo, hi] = run.speed_range_rpm;
    let o = crate::rotor::run::AtSpeedOptions {
        speeds_rpm: [lo, hi],
        count: 101,
        modes: 8,
        elements: DEFAULT_ELEMENTS,
    };
    let at = crate::rotor::run::at_speed(file, &o)?;
    let predicted: Vec<f64> = at
        .campbell
        .critical_speeds
        .iter()
        .filter(|c| c.order == 1 && c.whirl == crate::rotor::eigen::Whirl::Forward)
        .map(|c| c.speed_rpm)
        .collect();
    let comparison = run
        .critical_speeds
        .iter()
        .filter(|c| c.order == 1)
        .filter(|_| !predicted.is_empty())
        .map(|c| {
            let p = predicted[crate::numeric::nearest_index(&predicted, c.speed_rpm)];
            ComparedCritical {
                measured_rpm: c.speed_rpm,
                predicted_rpm: p,
                difference_pct: 100.0 * (p - c.speed_rpm) / c.speed_rpm,
            }
        })
        .collect();
    let response = response_fit(file, run, sensor_position_m)?;
    Ok(RunModel {
        critical_speeds_rpm: predicted,
        comparison,
        response,
    })
}

/// [`compare`] for a study: `None` when it gives no bearings in service (nothing to predict).
pub fn compare_study(
    study: &crate::model::study::Study,
    run: &RunResult,
    sensor_position_m: Option<f64>,
) -> Option<Result<RunModel, String>> {
    match crate::rotor::file::from_study(study) {
        Ok(Some(file)) => Some(compare(&file, run, sensor_position_m)),
        Ok(None) => None,
        Err(e) => Some(Err(e)),
    }
}

fn response_fit(
    file: &RotorFile,
    run: &RunResult,
    sensor_position_m: Option<f64>,
) -> Result<Option<ResponseFit>, String> {
    let Some((_, points)) = run.tracks.iter().find(|(o, _)| *o == 1) else {
        return Ok(None);
    };
    let b = bode(points);
    if b.speeds.len() < 8 {
        return Ok(None);
    }
    let rotor = &file.rotor;
    let position = sensor_position_m
        .or_else(|| rotor.bearings.first().map(|b| b.position_m))
        .unwrap_or(0.0);
    let (unbalances, words) = if rotor.unbalances.is_empty() {
        // Without a stated unbalance, one at the heaviest disc (else mid-span): the fitted
        // factor then carries the size, the shape is the model's.
        let at = rotor
            .shaft
            .discs
            .iter()
            .max_by(|a, b| a.mass_kg.total_cmp(&b.mass_kg))
            .map_or(0.5 * rotor.shaft.length_m(), |d| d.position_m);
        (
            vec![Unbalance {
                position_m: at,
                amount_kg_m: 1e-4,
                angle_deg: 0.0,
            }],
            format!("1e-4 kg·m at {at:.3} m (the model states none)"),
        )
    } else {
        (
            rotor.unbalances.clone(),
            "the model's unbalances".to_string(),
        )
    };
    let step = b.speeds.len().div_ceil(MAX_SPEEDS);
    let idx: Vec<usize> = (0..b.speeds.len())
        .step_by(step)
        .filter(|&i| b.speeds[i] > 0.0)
        .collect();
    let speeds: Vec<f64> = idx.iter().map(|&i| b.speeds[i]).collect();
    let model = rotor.assemble(BeamTheory::Timoshenko, DEFAULT_ELEMENTS, &[position])?;
    let pts = crate::rotor::unbalance::response(&model, &unbalances, &speeds, &[position])?;
    let power = match run.quantity {
        Quantity::Acceleration => 2,
        Quantity::Velocity => 1,
        Quantity::Displacement => 0,
    };
    let p: Vec<Complex64> = pts
        .iter()
        .map(|q| {
            let w = q.speed_rpm * std::f64::consts::PI / 30.0;
            Complex64::from_polar(q.amplitude_m, -q.phase_deg.to_radians())
                * Complex64::new(0.0, w).powi(power)
        })
        .collect();
    let m: Vec<Complex64> = idx.iter().map(|&i| b.vectors[i]).collect();
    let pp: f64 = p.iter().map(|v| v.norm_sqr()).sum();
    let mm: f64 = m.iter().map(|v| v.norm_sqr()).sum();
    if !(pp > 0.0 && mm > 0.0) {
        return Ok(None);
    }
    // Least squares of m ≈ c·p over one complex c.
    let c = m
        .iter()
        .zip(&p)
        .map(|(a, b)| a * b.conj())
        .sum::<Complex64>()
        / pp;
    let res: f64 = m.iter().zip(&p).map(|(a, b)| (a - c * b).norm_sqr()).sum();
    let lag = |v: Complex64| crate::coast::track::lag_deg(v);
    Ok(Some(ResponseFit {
        position_m: position,
        unbalance: words,
        measured_amplitude: m.iter().map(|v| v.norm()).collect(),
        predicted_amplitude: p.iter().map(|v| (c * v).norm()).collect(),
        measured_lag_deg: m.iter().map(|&v| lag(v)).collect(),
        predicted_lag_deg: p.iter().map(|&v| lag(c * v)).collect(),
        speeds_rpm: speeds,
        scale: c.norm(),
        angle_deg: -c.arg().to_degrees(),
        residual_pct: 100.0 * (res / mm).sqrt(),
    }))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::coast::track::OrderPoint;

    /// A "measured" run made of the model's own response times a known complex factor: the
    /// least-squares fit (normal equations of one complex unknown, common practice) gives the
    /// factor back and no residual, in each quantity.
    #[test]
    fn the_fit_recovers_a_known_unbalance_factor() {
        let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("sample-sessions/rotors/pump-rotor.json");
        let file = crate::rotor::file::read_rotor(&path).expect("rotor");
        let position = 0.3;
        let model = file
            .rotor
            .assemble(BeamTheory::Timoshenko, DEFAULT_ELEMENTS, &[position])
            .expect("model");
        let speeds: Vec<f64> = (0..400).map(|i| 1000.0 + 20.0 * i as f64).collect();
        let pts =
            crate::rotor::unbalance::response(&model, &file.rotor.unbalances, &speeds, &[position])
                .expect("response");
        let c0 = Complex64::from_polar(3.5, -0.7);
        for (quantity, power) in [(Quantity::Acceleration, 2), (Quantity::Displacement, 0)] {
            let points: Vec<OrderPoint> = pts
                .iter()
                .enumerate()
                .map(|(i, q)| {
                    let w = q.speed_rpm * std::f64::consts::PI / 30.0;
                    OrderPoint {
                        time_s: i as f64,
                        speed_rpm: q.speed_rpm,
                        vector: c0
                            * Complex64::from_polar(q.amplitude_m, -q.phase_deg.to_radians())
                            * Complex64::new(0.0, w).powi(power),
                    }
                })
                .collect();
            let run = RunResult {
                speed_range_rpm: [1000.0, 8980.0],
                direction: crate::coast::Direction::RunUp,
                critical_speeds: Vec::new(),
                subsynchronous: Vec::new(),
                warnings: Vec::new(),
                amplitude_unit: quantity.unit(),
                quantity,
                revolutions: points.len(),
                tracks: vec![(1, points)],
                spectra: Vec::new(),
            };
            let f = response_fit(&file, &run, Some(position))
                .expect("solves")
                .expect("a fit");
            assert!((f.scale - 3.5).abs() < 1e-6, "{}", f.scale);
            assert!(
                (f.angle_deg - 0.7f64.to_degrees()).abs() < 1e-4,
                "{}",
                f.angle_deg
            );
            assert!(f.residual_pct < 1e-4, "{}", f.residual_pct);
            assert_eq!(f.unbalance, "the model's unbalances");
        }
    }
}

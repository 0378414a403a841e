//! Steady response to unbalance against speed (Bode data), and the amplification factor and
//! separation margin of each resonance peak by the half-power points (rotor-notes §A5–A6).

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use super::model::{NODE_DOFS, RotorModel, Unbalance};
use crate::Complex64;

/// The response at one position and speed, seen by a probe along x (the load direction) and
/// as an orbit.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ResponsePoint {
    /// Spin speed, rpm.
    pub speed_rpm: f64,
    /// Position along the shaft, m.
    pub position_m: f64,
    /// Amplitude along x, m (zero to peak).
    pub amplitude_m: f64,
    /// Phase lag of the x motion behind the tach reference, degrees (0–360).
    pub phase_deg: f64,
    /// Amplitude along y, m (zero to peak).
    pub amplitude_y_m: f64,
    /// Phase lag of the y motion, degrees (0–360).
    pub phase_y_deg: f64,
    /// Orbit semi-major axis, m.
    pub major_m: f64,
    /// Orbit semi-minor axis, m.
    pub minor_m: f64,
    /// The orbit turns with the spin.
    pub forward: bool,
}

/// Undamped modes kept in the response basis of a large model (static shapes are added).
pub const RESPONSE_MODES: usize = 40;

fn lag_deg(s: Complex64) -> f64 {
    (-s.arg().to_degrees()).rem_euclid(360.0)
}

/// Response to `unbalances` at `positions_m` for each speed: solves
/// [K(Ω) − Ω²M + iΩ(C(Ω) + ΩG)] q̂ = f̂ with f̂_u = UΩ²e^{iα}, f̂_v = −iUΩ²e^{iα} at each
/// unbalance's node (time factor e^{iΩt}, angle α from +x toward +y at the tach instant).
pub fn response(
    model: &RotorModel,
    unbalances: &[Unbalance],
    speeds_rpm: &[f64],
    positions_m: &[f64],
) -> Result<Vec<ResponsePoint>, String> {
    let n = model.dofs();
    let probes: Vec<usize> = positions_m.iter().map(|&x| model.node_near(x)).collect();
    // Large models are solved on the undamped modes enriched with the static shapes of forces at
    // the bearings and unbalances (exact at those points in the static limit); small ones whole.
    let mut attach: Vec<usize> = model
        .bearing_nodes
        .iter()
        .copied()
        .chain(unbalances.iter().map(|u| model.node_near(u.position_m)))
        .flat_map(|b| [NODE_DOFS * b, NODE_DOFS * b + 1])
        .collect();
    attach.sort_unstable();
    attach.dedup();
    let basis = if n <= 96 {
        None
    } else {
        let mut k = model.k.clone();
        let co = model.bearing_coefficients(speeds_rpm.iter().copied().fold(0.0, f64::max))?;
        for (c, &node) in co.iter().zip(&model.bearing_nodes) {
            for d in 0..2 {
                k[(NODE_DOFS * node + d, NODE_DOFS * node + d)] += c.k_n_per_m[d][d].max(0.0);
            }
        }
        let k = (&k + k.transpose()) * 0.5;
        Some(super::eigen::Basis::lowest(&k, &model.m, RESPONSE_MODES, &attach)?.phi)
    };
    // The basis as complex numbers, once for every speed.
    let basis_c = basis.as_ref().map(|p| p.map(|v| Complex64::new(v, 0.0)));
    let mut out = Vec::with_capacity(speeds_rpm.len() * probes.len());
    for &rpm in speeds_rpm {
        let w = rpm * std::f64::consts::PI / 30.0;
        let (k, c) = model.at_speed(rpm)?;
        let (k, c, m) = match &basis {
            Some(p) => (
                p.tr_mul(&(&k * p)),
                p.tr_mul(&(&c * p)),
                p.tr_mul(&(&model.m * p)),
            ),
            None => (k, c, model.m.clone()),
        };
        let r = k.nrows();
        let z = DMatrix::<Complex64>::from_fn(r, r, |i, j| {
            Complex64::new(k[(i, j)] - w * w * m[(i, j)], w * c[(i, j)])
        });
        let mut f = DVector::<Complex64>::zeros(n);
        for u in unbalances {
            let node = model.node_near(u.position_m);
            let e = Complex64::from_polar(u.amount_kg_m * w * w, u.angle_deg.to_radians());
            f[NODE_DOFS * node] += e;
            f[NODE_DOFS * node + 1] += Complex64::new(0.0, -1.0) * e;
        }
        let fr = match &basis_c {
            Some(p) => p.tr_mul(&f),
            None => f,
        };
        let qr = if w == 0.0 {
            DVector::zeros(r)
        } else {
            z.lu().solve(&fr).ok_or_else(|| {
                format!(
                    "at {rpm:.0} rpm the rotor has no steady response (a free rotor, or \
                     undamped exactly at a critical speed)"
                )
            })?
        };
        let q = match &basis_c {
            Some(p) => p * qr,
            None => qr,
        };
        for (&node, &x) in probes.iter().zip(positions_m) {
            let (u, v) = (q[NODE_DOFS * node], q[NODE_DOFS * node + 1]);
            let i = Complex64::new(0.0, 1.0);
            let rf = (u + i * v).norm() / 2.0;
            let rb = (u - i * v).norm() / 2.0;
            if !(u.norm().is_finite() && v.norm().is_finite()) {
                return Err(format!("at {rpm:.0} rpm the response is not finite"));
            }
            out.push(ResponsePoint {
                speed_rpm: rpm,
                position_m: x,
                amplitude_m: u.norm(),
                phase_deg: lag_deg(u),
                amplitude_y_m: v.norm(),
                phase_y_deg: lag_deg(v),
                major_m: rf + rb,
                minor_m: (rf - rb).abs(),
                forward: rf >= rb,
            });
        }
    }
    Ok(out)
}

/// A resonance peak of a response curve with its half-power speeds.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Peak {
    /// Position of the curve, m.
    pub position_m: f64,
    /// Speed of the peak (parabolic refinement), rpm.
    pub speed_rpm: f64,
    /// Peak amplitude, m.
    pub amplitude_m: f64,
    /// Lower half-power speed N1, rpm (`None`: the curve does not fall that far below the peak).
    pub n1_rpm: Option<f64>,
    /// Upper half-power speed N2, rpm.
    pub n2_rpm: Option<f64>,
    /// Amplification factor N_c/(N2 − N1) (API RP 684 rule, verify against your edition).
    pub amplification_factor: Option<f64>,
}

/// Peaks of `amplitude(speed)` (ascending speeds) that stand √2 above the curve on both sides,
/// with the half-power points by linear interpolation.
pub fn peaks(position_m: f64, speeds: &[f64], amplitude: &[f64]) -> Vec<Peak> {
    let n = speeds.len().min(amplitude.len());
    let mut out = Vec::new();
    for i in 1..n.saturating_sub(1) {
        let a = amplitude[i];
        if !(a > amplitude[i - 1] && a >= amplitude[i + 1]) {
            continue;
        }
        let (n1, n2) = crate::numeric::half_power_points(&speeds[..n], &amplitude[..n], i);
        if n1.is_none() && n2.is_none() {
            continue;
        }
        let (speed, top) = crate::numeric::parabolic_peak(
            [speeds[i - 1], speeds[i], speeds[i + 1]],
            [amplitude[i - 1], a, amplitude[i + 1]],
        )
        .unwrap_or((speeds[i], a));
        let af = match (n1, n2) {
            (Some(a1), Some(a2)) if a2 > a1 => Some(speed / (a2 - a1)),
            _ => None,
        };
        out.push(Peak {
            position_m,
            speed_rpm: speed,
            amplitude_m: top,
            n1_rpm: n1,
            n2_rpm: n2,
            amplification_factor: af,
        });
    }
    out
}

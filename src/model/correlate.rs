//! Test–model correlation and the support-stiffness map.

use serde::Serialize;

use super::beam::{BeamTheory, Shaft};
use super::run::{converged_modes, interpolate};
use crate::estimate::shape::mac_real;

/// A paired test and model mode.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Pair {
    /// Index of the test mode.
    pub test: usize,
    /// Index of the model mode (rigid-body modes included in the numbering).
    pub model: usize,
    /// Test frequency, Hz.
    pub test_hz: f64,
    /// Model frequency, Hz.
    pub model_hz: f64,
    /// (test − model)/model, %.
    pub difference_pct: f64,
    /// MAC of the shapes at the stations.
    pub mac: f64,
}

/// The correlation.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Correlation {
    /// Pairs, by test mode.
    pub pairs: Vec<Pair>,
    /// MAC[test][model] (rigid-body model modes included).
    pub mac: Vec<Vec<f64>>,
    /// Test modes with no partner.
    pub unpaired_test: Vec<usize>,
    /// Flexible model modes with no partner.
    pub unpaired_model: Vec<usize>,
}

/// Pairs test modes (frequencies, real shapes at `positions_m`) with the model's modes by MAC
/// (greedy, highest first, each used once, MAC ≥ `min_mac`). Model shapes are read at the test
/// positions from the model's nodes.
pub fn correlate(
    positions_m: &[f64],
    test: &[(f64, Vec<f64>)],
    model_nodes_m: &[f64],
    model: &[super::beam::BeamMode],
    min_mac: f64,
) -> Correlation {
    let model_at: Vec<Vec<f64>> = model
        .iter()
        .map(|m| {
            positions_m
                .iter()
                .map(|&x| interpolate(model_nodes_m, &m.displacement, x))
                .collect()
        })
        .collect();
    let mac: Vec<Vec<f64>> = test
        .iter()
        .map(|(_, s)| model_at.iter().map(|m| mac_real(s, m)).collect())
        .collect();
    let mut cands: Vec<(f64, usize, usize)> = Vec::new();
    for (i, row) in mac.iter().enumerate() {
        for (j, &v) in row.iter().enumerate() {
            if !model[j].rigid_body && v >= min_mac {
                cands.push((v, i, j));
            }
        }
    }
    cands.sort_by(|a, b| b.0.total_cmp(&a.0));
    let (mut used_t, mut used_m) = (vec![false; test.len()], vec![false; model.len()]);
    let mut pairs = Vec::new();
    for (v, i, j) in cands {
        if used_t[i] || used_m[j] {
            continue;
        }
        used_t[i] = true;
        used_m[j] = true;
        pairs.push(Pair {
            test: i,
            model: j,
            test_hz: test[i].0,
            model_hz: model[j].frequency_hz,
            difference_pct: (test[i].0 - model[j].frequency_hz) / model[j].frequency_hz * 100.0,
            mac: v,
        });
    }
    pairs.sort_by_key(|p| p.test);
    Correlation {
        pairs,
        mac,
        unpaired_test: (0..test.len()).filter(|&i| !used_t[i]).collect(),
        unpaired_model: (0..model.len())
            .filter(|&j| !used_m[j] && !model[j].rigid_body)
            .collect(),
    }
}

/// Natural frequencies (Hz, lowest `count` flexible-or-not modes) with every support set to each
/// stiffness of a log sweep from `k_lo` to `k_hi` N/m in `points` steps, each on a converged
/// mesh. Undamped, no gyroscopic effect.
pub fn stiffness_map(
    shaft: &Shaft,
    range: [f64; 2],
    points: usize,
    count: usize,
) -> Result<Vec<(f64, Vec<f64>)>, String> {
    sweep_supports(shaft, range, points, |s| {
        let c = converged_modes(s, BeamTheory::Timoshenko, count, &[])?;
        Ok(c.modes.iter().map(|m| m.frequency_hz).collect())
    })
}

/// The log sweep of every support's stiffness behind [`stiffness_map`], with the frequencies of
/// each swept shaft from `solve`.
pub fn sweep_supports(
    shaft: &Shaft,
    [k_lo, k_hi]: [f64; 2],
    points: usize,
    mut solve: impl FnMut(&Shaft) -> Result<Vec<f64>, String>,
) -> Result<Vec<(f64, Vec<f64>)>, String> {
    if shaft.supports.is_empty() {
        return Err(
            "the model has no supports: add the bearing positions to sweep their stiffness".into(),
        );
    }
    if !(k_lo > 0.0 && k_hi > k_lo) || points < 2 {
        return Err("the stiffness range must be 0 < low < high with at least 2 points".into());
    }
    let mut out = Vec::with_capacity(points);
    let mut s = shaft.clone();
    for p in 0..points {
        let k = k_lo * (k_hi / k_lo).powf(p as f64 / (points - 1) as f64);
        for sup in &mut s.supports {
            sup.stiffness_n_per_m = k;
        }
        out.push((k, solve(&s)?));
    }
    Ok(out)
}

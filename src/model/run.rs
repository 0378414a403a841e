//! The model from a file to its modes: read and check the shaft, refine the mesh until the modes
//! asked for converge, and write `modes.json`.

use std::collections::BTreeMap;
use std::path::Path;

use serde::Serialize;

use super::beam::{BeamMode, BeamTheory, Shaft};
use crate::acquire::InputError;

/// Relative change of every requested frequency between two meshes below which the finer is
/// taken as converged.
pub const CONVERGED: f64 = 1e-5;

/// Reads a shaft model (the JSON format in README.md) and checks its geometry.
pub fn read_shaft(path: &Path) -> Result<Shaft, InputError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| InputError::new(path, format!("cannot read: {e}")))?;
    parse_shaft(path, &text)
}

/// [`read_shaft`] of text already read (`path` names it in errors).
pub fn parse_shaft(path: &Path, text: &str) -> Result<Shaft, InputError> {
    let shaft: Shaft = serde_json::from_str(text)
        .map_err(|e| InputError::new(path, format!("is not a valid shaft model: {e}")))?;
    shaft.validate().map_err(|m| InputError::new(path, m))?;
    Ok(shaft)
}

/// Converged modes and the mesh that gave them.
#[derive(Debug, Clone)]
pub struct Converged {
    /// Node positions, m.
    pub nodes_m: Vec<f64>,
    /// Modes, lowest first.
    pub modes: Vec<BeamMode>,
    /// Elements over the length in the final mesh.
    pub elements: usize,
    /// Largest relative frequency change from the previous mesh.
    pub last_change: f64,
}

/// Modes of `shaft` on meshes of 16, 32, 64 … elements (plus nodes at `extra_nodes_m`) until the
/// lowest `count` frequencies change by less than [`CONVERGED`], or stop converging (up to 1024
/// elements). Discretisation error falls as h⁴ (16× per halving); once a halving no longer
/// halves the change, round-off of the dense eigensolver (relative ε·λ_max/λ, growing as h⁻⁴)
/// has taken over and a finer mesh would be slower without being better.
pub fn converged_modes(
    shaft: &Shaft,
    theory: BeamTheory,
    count: usize,
    extra_nodes_m: &[f64],
) -> Result<Converged, String> {
    converged_modes_to(shaft, theory, count, extra_nodes_m, CONVERGED)
}

/// [`converged_modes`] to a relative tolerance of the caller's choice.
pub fn converged_modes_to(
    shaft: &Shaft,
    theory: BeamTheory,
    count: usize,
    extra_nodes_m: &[f64],
    tolerance: f64,
) -> Result<Converged, String> {
    let mut elements = 16;
    let started = std::time::Instant::now();
    let (_, mut modes) = shaft.modes(theory, count, elements, extra_nodes_m)?;
    let mut previous = f64::INFINITY;
    loop {
        let next = elements * 2;
        let (fe, modes2) = shaft.modes(theory, count, next, extra_nodes_m)?;
        let change = modes
            .iter()
            .zip(&modes2)
            .filter(|(a, _)| !a.rigid_body)
            .map(|(a, b)| ((b.frequency_hz - a.frequency_hz) / b.frequency_hz).abs())
            .fold(0.0f64, f64::max);
        modes = modes2;
        elements = next;
        let stalled = change > 0.5 * previous;
        previous = change;
        // Bounded work: the mesh stops doubling at 1024 elements, or once a refinement has taken
        // more than a few seconds (the next would take eight times as long); `last_change` then
        // says how far from converged the result is.
        let slow = started.elapsed().as_secs_f64() > 3.0;
        if change < tolerance || stalled || elements >= 1024 || slow {
            return Ok(Converged {
                nodes_m: fe.nodes_m,
                modes,
                elements,
                last_change: change,
            });
        }
    }
}

#[derive(Serialize)]
struct Point {
    position_m: f64,
    value: f64,
}

#[derive(Serialize)]
struct StationPoint {
    station: u32,
    position_m: f64,
    value: f64,
}

#[derive(Serialize)]
struct ModeOut {
    frequency_hz: f64,
    rigid_body: bool,
    shape: Vec<Point>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    stations: Vec<StationPoint>,
}

#[derive(Serialize)]
struct ModesFile {
    modes: Vec<ModeOut>,
    theory: &'static str,
    elements: usize,
    shape_units: &'static str,
}

/// `modes.json` for converged modes; station values where `stations` (number → position) are given.
pub fn modes_json(c: &Converged, stations: &BTreeMap<u32, f64>) -> String {
    let modes = c
        .modes
        .iter()
        .map(|m| ModeOut {
            frequency_hz: m.frequency_hz,
            rigid_body: m.rigid_body,
            shape: c
                .nodes_m
                .iter()
                .zip(&m.displacement)
                .map(|(&x, &v)| Point {
                    position_m: x,
                    value: v,
                })
                .collect(),
            stations: stations
                .iter()
                .map(|(&st, &x)| StationPoint {
                    station: st,
                    position_m: x,
                    value: interpolate(&c.nodes_m, &m.displacement, x),
                })
                .collect(),
        })
        .collect();
    let file = ModesFile {
        modes,
        theory: "timoshenko",
        elements: c.elements,
        shape_units: "lateral displacement, mass-normalised (phi^T M phi = 1), 1/sqrt(kg)",
    };
    serde_json::to_string_pretty(&file).unwrap_or_default()
}

/// Linear interpolation of nodal values at `x` (stations are also mesh nodes, so this is exact
/// there).
pub fn interpolate(nodes: &[f64], values: &[f64], x: f64) -> f64 {
    let i = nodes.partition_point(|&n| n < x);
    if i == 0 {
        return values.first().copied().unwrap_or(0.0);
    }
    if i >= nodes.len() {
        return values.last().copied().unwrap_or(0.0);
    }
    let (x0, x1) = (nodes[i - 1], nodes[i]);
    let t = if x1 > x0 { (x - x0) / (x1 - x0) } else { 0.0 };
    values[i - 1] + t * (values[i] - values[i - 1])
}

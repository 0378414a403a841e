//! The rotor as a spinning finite-element model: the shaft's Timoshenko elements in two planes
//! with their gyroscopic matrix, rigid discs, isotropic supports and bearings with eight
//! speed-dependent coefficients, assembled into M q̈ + (C + ΩG) q̇ + K q = f.
//!
//! Node DOFs are `[u, v, θx, θy]` (u along x, v along y, small rotations about x and y). The x–z
//! plane uses (u, θy) with the planar element unchanged; the y–z plane uses (v, −θx), so its
//! planar matrices enter with the rotation sign flipped (rotor-notes §0, §A1).

use nalgebra::DMatrix;

use super::bearing::{BearingLaw, Coefficients};
use crate::model::beam::{BeamTheory, Shaft, element_with_gyro};

/// Degrees of freedom per node.
pub const NODE_DOFS: usize = 4;

/// A bearing placed on the rotor.
#[derive(Debug, Clone, PartialEq)]
pub struct PlacedBearing {
    /// Position from the left end, m.
    pub position_m: f64,
    /// Its coefficients against speed.
    pub law: BearingLaw,
}

/// An unbalance: amount m·e at a position and an angle from +x toward +y at the tach instant.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Unbalance {
    /// Position from the left end, m.
    pub position_m: f64,
    /// Amount, kg·m.
    pub amount_kg_m: f64,
    /// Angle, degrees.
    pub angle_deg: f64,
}

/// What a rotor is made of, before meshing.
#[derive(Debug, Clone, PartialEq)]
pub struct Rotor {
    /// Shaft, discs and isotropic supports (as `tapgrid model` reads them).
    pub shaft: Shaft,
    /// Bearings with eight coefficients.
    pub bearings: Vec<PlacedBearing>,
    /// Unbalances.
    pub unbalances: Vec<Unbalance>,
}

/// The assembled rotor: speed-independent matrices and where the bearings act.
#[derive(Debug, Clone)]
pub struct RotorModel {
    /// Node positions, m.
    pub nodes_m: Vec<f64>,
    /// Mass matrix (shaft and discs), kg and kg·m².
    pub m: DMatrix<f64>,
    /// Stiffness of the shaft and the isotropic supports.
    pub k: DMatrix<f64>,
    /// Speed-independent damping (none from the shaft: material damping is not modelled).
    pub c: DMatrix<f64>,
    /// Gyroscopic matrix, to be multiplied by the spin speed in rad/s.
    pub g: DMatrix<f64>,
    /// Node of each bearing, in the order of [`Rotor::bearings`].
    pub bearing_nodes: Vec<usize>,
    /// Bearing laws.
    pub bearings: Vec<BearingLaw>,
}

/// Elements over the shaft's length the rotor mesh uses by default: enough for the lowest ten
/// modes of a uniform shaft to better than 1e-4 (the element converges as h⁴).
pub const DEFAULT_ELEMENTS: usize = 40;

impl Rotor {
    /// Checks the shaft, bearings and unbalances; the message names the bad item.
    pub fn validate(&self) -> Result<(), String> {
        self.shaft.validate()?;
        let l = self.shaft.length_m();
        for (i, b) in (1..).zip(&self.bearings) {
            if !(b.position_m.is_finite() && (0.0..=l).contains(&b.position_m)) {
                return Err(format!(
                    "bearing {i} at {} m is outside the shaft (0–{l} m)",
                    b.position_m
                ));
            }
        }
        for (i, u) in (1..).zip(&self.unbalances) {
            if !(u.position_m.is_finite() && (0.0..=l).contains(&u.position_m)) {
                return Err(format!(
                    "unbalance {i} at {} m is outside the shaft (0–{l} m)",
                    u.position_m
                ));
            }
            if !(u.amount_kg_m.is_finite() && (0.0..1e3).contains(&u.amount_kg_m)) {
                return Err(format!(
                    "unbalance {i}: amount {} kg·m must be ≥ 0 (and below 1000)",
                    u.amount_kg_m
                ));
            }
            if !u.angle_deg.is_finite() {
                return Err(format!("unbalance {i}: angle must be a number"));
            }
        }
        Ok(())
    }

    /// Meshes and assembles with elements ≤ L/`elements`, nodes also at bearings, unbalances
    /// and `extra_nodes_m`.
    pub fn assemble(
        &self,
        theory: BeamTheory,
        elements: usize,
        extra_nodes_m: &[f64],
    ) -> Result<RotorModel, String> {
        self.validate()?;
        let shaft = &self.shaft;
        let mut extra: Vec<f64> = extra_nodes_m.to_vec();
        extra.extend(self.bearings.iter().map(|b| b.position_m));
        extra.extend(self.unbalances.iter().map(|u| u.position_m));
        let nodes = shaft.mesh(shaft.length_m() / elements.max(1) as f64, &extra);
        let n = NODE_DOFS * nodes.len();
        let mut m = DMatrix::<f64>::zeros(n, n);
        let mut k = DMatrix::<f64>::zeros(n, n);
        let mut g = DMatrix::<f64>::zeros(n, n);
        // Planar (w1, ψ1, w2, ψ2) into node DOFs: x–z uses (u, θy) as is, y–z uses (v, θx) with
        // the rotations' sign flipped.
        const XZ: [usize; 4] = [0, 3, 4, 7];
        const YZ: [usize; 4] = [1, 2, 5, 6];
        const SIGN: [f64; 4] = [1.0, -1.0, 1.0, -1.0];
        for e in 0..nodes.len() - 1 {
            let (x0, x1) = (nodes[e], nodes[e + 1]);
            let sec = shaft.section_at(0.5 * (x0 + x1));
            let (ke, me, ge) =
                element_with_gyro(sec, sec.material.unwrap_or(shaft.material), x1 - x0, theory);
            let base = NODE_DOFS * e;
            for i in 0..4 {
                for j in 0..4 {
                    let (a, b) = (base + XZ[i], base + XZ[j]);
                    k[(a, b)] += ke[i][j];
                    m[(a, b)] += me[i][j];
                    let (a, b) = (base + YZ[i], base + YZ[j]);
                    let s = SIGN[i] * SIGN[j];
                    k[(a, b)] += s * ke[i][j];
                    m[(a, b)] += s * me[i][j];
                }
            }
            for i in 0..8 {
                for j in 0..8 {
                    g[(base + i, base + j)] += ge[i][j];
                }
            }
        }
        let node_of = |p: f64| crate::numeric::nearest_index(&nodes, p);
        for s in &shaft.supports {
            let b = NODE_DOFS * node_of(s.position_m);
            for d in 0..2 {
                k[(b + d, b + d)] += s.stiffness_n_per_m;
                k[(b + 2 + d, b + 2 + d)] += s.rotational_stiffness_n_m_per_rad;
            }
        }
        for d in &shaft.discs {
            let b = NODE_DOFS * node_of(d.position_m);
            m[(b, b)] += d.mass_kg;
            m[(b + 1, b + 1)] += d.mass_kg;
            m[(b + 2, b + 2)] += d.transverse_inertia_kg_m2;
            m[(b + 3, b + 3)] += d.transverse_inertia_kg_m2;
            // Id θ̈x + Ω Ip θ̇y = Mx, Id θ̈y − Ω Ip θ̇x = My (rotor-notes §A2).
            g[(b + 2, b + 3)] += d.polar_inertia_kg_m2;
            g[(b + 3, b + 2)] -= d.polar_inertia_kg_m2;
        }
        Ok(RotorModel {
            bearing_nodes: self
                .bearings
                .iter()
                .map(|b| node_of(b.position_m))
                .collect(),
            bearings: prepare(&self.bearings)?,
            c: DMatrix::zeros(n, n),
            nodes_m: nodes,
            m,
            k,
            g,
        })
    }
}

/// Bearing laws ready for a sweep; bearings of one L/D share one film table.
fn prepare(bearings: &[PlacedBearing]) -> Result<Vec<BearingLaw>, String> {
    let mut done: Vec<(PlacedBearing, BearingLaw)> = Vec::new();
    let mut out = Vec::new();
    for (i, b) in bearings.iter().enumerate() {
        let law = match (&b.law, done.iter().find(|(d, _)| same_film(&d.law, &b.law))) {
            (BearingLaw::Plain(p, _), Some((_, BearingLaw::PlainTable(_, t)))) => {
                BearingLaw::PlainTable(*p, t.clone())
            }
            _ => b
                .law
                .prepared()
                .map_err(|e| format!("bearing {}: {e}", i + 1))?,
        };
        done.push((b.clone(), law.clone()));
        out.push(law);
    }
    Ok(out)
}

/// Two finite film bearings of the same bore (L/D, lobes) share a dimensionless film.
fn same_film(a: &BearingLaw, b: &BearingLaw) -> bool {
    use super::bearing::FilmMethod::Finite;
    match (a, b) {
        (BearingLaw::Plain(p, Finite), BearingLaw::Plain(q, Finite)) => p.bore() == q.bore(),
        _ => false,
    }
}

impl RotorModel {
    /// Degrees of freedom.
    pub fn dofs(&self) -> usize {
        self.m.nrows()
    }

    /// Index of the node nearest `x` m.
    pub fn node_near(&self, x: f64) -> usize {
        crate::numeric::nearest_index(&self.nodes_m, x)
    }

    /// Each bearing's coefficients at `speed_rpm`.
    pub fn bearing_coefficients(&self, speed_rpm: f64) -> Result<Vec<Coefficients>, String> {
        self.bearings
            .iter()
            .enumerate()
            .map(|(i, b)| {
                b.at(speed_rpm)
                    .map_err(|e| format!("bearing {}: {e}", i + 1))
            })
            .collect()
    }

    /// Stiffness K(Ω) and damping C(Ω) + ΩG at `speed_rpm` (bearings included).
    pub fn at_speed(&self, speed_rpm: f64) -> Result<(DMatrix<f64>, DMatrix<f64>), String> {
        let omega = speed_rpm * std::f64::consts::PI / 30.0;
        let mut k = self.k.clone();
        let mut c = &self.c + &self.g * omega;
        for (co, &node) in self
            .bearing_coefficients(speed_rpm)?
            .iter()
            .zip(&self.bearing_nodes)
        {
            let b = NODE_DOFS * node;
            for i in 0..2 {
                for j in 0..2 {
                    k[(b + i, b + j)] += co.k_n_per_m[i][j];
                    c[(b + i, b + j)] += co.c_n_s_per_m[i][j];
                }
            }
        }
        Ok((k, c))
    }
}

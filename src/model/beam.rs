//! Two-node Timoshenko beam elements (Friedman & Kosmatka 1993; Davis, Henshell & Warburton 1972),
//! assembled for a stepped shaft with rigid discs and spring supports, and the generalized
//! symmetric eigenproblem K φ = ω² M φ solved for its lowest modes on the sparse matrices
//! (`numeric::lowest_modes_sparse`: shift-invert subspace iteration).

use serde::{Deserialize, Serialize};

/// The most sections a shaft may have.
pub const MAX_SECTIONS: usize = 500;

/// Isotropic material.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Material {
    /// Young's modulus, Pa.
    pub youngs_modulus_pa: f64,
    /// Density, kg/m³.
    pub density_kg_m3: f64,
    /// Poisson's ratio.
    pub poisson_ratio: f64,
}

impl Material {
    /// Structural steel: E = 210 GPa, ρ = 7850 kg/m³, ν = 0.3 (handbook values; common practice).
    pub const STEEL: Material = Material {
        youngs_modulus_pa: 210e9,
        density_kg_m3: 7850.0,
        poisson_ratio: 0.3,
    };

    /// Wrought aluminium alloy: E = 70 GPa, ρ = 2700 kg/m³, ν = 0.33 (handbook values, from
    /// memory; common practice).
    pub const ALUMINIUM: Material = Material {
        youngs_modulus_pa: 70e9,
        density_kg_m3: 2700.0,
        poisson_ratio: 0.33,
    };
}

/// A cylindrical section of the shaft.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Section {
    /// Length, m.
    pub length_m: f64,
    /// Outer diameter, m.
    pub outer_diameter_m: f64,
    /// Inner diameter (0 for solid), m.
    #[serde(default)]
    pub inner_diameter_m: f64,
    /// Overrides the shaft material for this section.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub material: Option<Material>,
}

/// A rigid disc or added mass.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Disc {
    /// Position from the left end, m.
    pub position_m: f64,
    /// Mass, kg.
    pub mass_kg: f64,
    /// Polar moment of inertia, kg·m² (enters gyroscopic terms only; unused without rotation).
    #[serde(default)]
    pub polar_inertia_kg_m2: f64,
    /// Transverse (diametral) moment of inertia, kg·m².
    #[serde(default)]
    pub transverse_inertia_kg_m2: f64,
}

/// A spring support (bearing or suspension): lateral, and optionally against rotation (a clamp,
/// or a pair of bearings close together).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Support {
    /// Position from the left end, m.
    pub position_m: f64,
    /// Lateral stiffness, N/m.
    pub stiffness_n_per_m: f64,
    /// Stiffness against rotation of the section, N·m/rad (optional; 0 = none).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub rotational_stiffness_n_m_per_rad: f64,
}

fn is_zero(v: &f64) -> bool {
    *v == 0.0
}

impl Support {
    /// A lateral spring of stiffness `k` N/m at `x` m.
    pub fn lateral(x: f64, k: f64) -> Self {
        Self {
            position_m: x,
            stiffness_n_per_m: k,
            rotational_stiffness_n_m_per_rad: 0.0,
        }
    }
}

/// A shaft: sections left to right, discs and supports.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Shaft {
    /// Default material.
    pub material: Material,
    /// Sections, left to right.
    pub sections: Vec<Section>,
    /// Discs and added masses.
    #[serde(default)]
    pub discs: Vec<Disc>,
    /// Supports; none = free-free.
    #[serde(default)]
    pub supports: Vec<Support>,
}

/// Which beam theory the elements use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum BeamTheory {
    /// Shear deformation and rotary inertia included.
    Timoshenko,
    /// Classical Euler–Bernoulli (Φ = 0, no rotary inertia).
    EulerBernoulli,
    /// Rayleigh beam: rotary inertia (and gyroscopic terms at speed) without shear (Φ = 0).
    Rayleigh,
}

/// Shear coefficient of a circular tube (Cowper 1966, from memory):
/// κ = 6(1+ν)(1+m²)² / [(7+6ν)(1+m²)² + (20+12ν)m²], m = Di/Do; solid: 6(1+ν)/(7+6ν).
pub fn cowper_kappa(poisson: f64, inner_over_outer: f64) -> f64 {
    let m2 = inner_over_outer * inner_over_outer;
    let a = (1.0 + m2) * (1.0 + m2);
    6.0 * (1.0 + poisson) * a / ((7.0 + 6.0 * poisson) * a + (20.0 + 12.0 * poisson) * m2)
}

/// An assembled finite-element model.
#[derive(Debug, Clone)]
pub struct FeModel {
    /// Node positions, m; DOFs are [w_0, θ_0, w_1, θ_1, …].
    pub nodes_m: Vec<f64>,
    /// Stiffness matrix (sparse: banded in node order).
    pub k: nalgebra_sparse::CscMatrix<f64>,
    /// Mass matrix.
    pub m: nalgebra_sparse::CscMatrix<f64>,
}

/// A mode of the model.
#[derive(Debug, Clone, PartialEq)]
pub struct BeamMode {
    /// Natural frequency, Hz.
    pub frequency_hz: f64,
    /// A rigid-body mode of an unsupported shaft.
    pub rigid_body: bool,
    /// Lateral displacement at each node, mass-normalised (φᵀMφ = 1, 1/√kg).
    pub displacement: Vec<f64>,
}

impl Shaft {
    /// Total length, m.
    pub fn length_m(&self) -> f64 {
        self.sections.iter().map(|s| s.length_m).sum()
    }

    /// Checks the geometry; the message names the bad item.
    pub fn validate(&self) -> Result<(), String> {
        // Physical limits of a part a bench test or a rotor model can mean; a value outside
        // them is a typing or unit slip (mm for m), and would otherwise make the refinement
        // run for minutes and report modes of 0 Hz.
        let num = |what: String, v: f64, lo: f64, hi: f64, unit: &str| -> Result<(), String> {
            if v.is_finite() && (lo..=hi).contains(&v) {
                Ok(())
            } else {
                let show = crate::units::show;
                Err(format!(
                    "{what} {} {unit} is outside physical limits ({} to {} {unit})",
                    show(v),
                    show(lo),
                    show(hi)
                ))
            }
        };
        let material = |what: &str, m: &Material| -> Result<(), String> {
            num(
                format!("{what}: Young's modulus"),
                m.youngs_modulus_pa,
                1e6,
                2e12,
                "Pa",
            )?;
            num(
                format!("{what}: density"),
                m.density_kg_m3,
                10.0,
                25_000.0,
                "kg/m³",
            )?;
            num(
                format!("{what}: Poisson's ratio"),
                m.poisson_ratio,
                0.0,
                0.499,
                "",
            )
        };
        if self.sections.is_empty() {
            return Err("the shaft has no sections".into());
        }
        if self.sections.len() > MAX_SECTIONS {
            return Err(format!(
                "the shaft has {} sections: at most {MAX_SECTIONS}",
                self.sections.len()
            ));
        }
        material("shaft material", &self.material)?;
        let mut d_max = 0.0f64;
        for (i, s) in (1..).zip(self.sections.iter()) {
            if !(s.length_m.is_finite() && s.length_m > 0.0) {
                return Err(format!(
                    "section {i}: length {} m must be positive",
                    s.length_m
                ));
            }
            num(format!("section {i}: length"), s.length_m, 1e-5, 100.0, "m")?;
            if !(s.outer_diameter_m.is_finite() && s.outer_diameter_m > 0.0) {
                return Err(format!("section {i}: outer diameter must be positive"));
            }
            num(
                format!("section {i}: outer diameter"),
                s.outer_diameter_m,
                1e-4,
                10.0,
                "m",
            )?;
            if !(s.inner_diameter_m >= 0.0 && s.inner_diameter_m < s.outer_diameter_m) {
                return Err(format!(
                    "section {i}: inner diameter {} m must be ≥ 0 and below the outer {} m",
                    s.inner_diameter_m, s.outer_diameter_m
                ));
            }
            if let Some(m) = &s.material {
                material(&format!("section {i}"), m)?;
            }
            d_max = d_max.max(s.outer_diameter_m);
        }
        let l = self.length_m();
        num("the shaft's length".into(), l, 1e-3, 100.0, "m")?;
        if l / d_max > 2000.0 {
            return Err(format!(
                "the shaft is {l} m long and at most {d_max} m thick (length/diameter {:.0}): \
                 more slender than any shaft (at most 2000); check the units of the lengths",
                l / d_max
            ));
        }
        if self.supports.len() > 100 || self.discs.len() > 500 {
            return Err("at most 100 supports and 500 discs".into());
        }
        for (i, s) in (1..).zip(self.supports.iter()) {
            if !(0.0..=l).contains(&s.position_m) {
                return Err(format!(
                    "support {i} at {} m is outside the part (0–{l} m)",
                    s.position_m
                ));
            }
            if s.stiffness_n_per_m.is_nan() || s.stiffness_n_per_m < 0.0 {
                return Err(format!("support {i}: stiffness must be ≥ 0"));
            }
            let kr = s.rotational_stiffness_n_m_per_rad;
            if kr.is_nan() || kr < 0.0 {
                return Err(format!("support {i}: rotational stiffness must be ≥ 0"));
            }
            if s.stiffness_n_per_m.is_finite() {
                num(
                    format!("support {i}: stiffness"),
                    s.stiffness_n_per_m,
                    0.0,
                    1e14,
                    "N/m",
                )?;
            }
            if kr.is_finite() {
                num(
                    format!("support {i}: rotational stiffness"),
                    kr,
                    0.0,
                    1e14,
                    "N·m/rad",
                )?;
            }
        }
        for (i, d) in (1..).zip(self.discs.iter()) {
            if !(0.0..=l).contains(&d.position_m) {
                return Err(format!(
                    "disc {i} at {} m is outside the part (0–{l} m)",
                    d.position_m
                ));
            }
            num(format!("disc {i}: mass"), d.mass_kg, 0.0, 1e6, "kg")?;
            num(
                format!("disc {i}: polar inertia"),
                d.polar_inertia_kg_m2,
                0.0,
                1e6,
                "kg·m²",
            )?;
            num(
                format!("disc {i}: transverse inertia"),
                d.transverse_inertia_kg_m2,
                0.0,
                1e6,
                "kg·m²",
            )?;
        }
        Ok(())
    }

    /// Assembles K and M with elements no longer than `max_element_m`, with nodes also at `extra_nodes_m`.
    pub fn assemble(
        &self,
        theory: BeamTheory,
        max_element_m: f64,
        extra_nodes_m: &[f64],
    ) -> Result<FeModel, String> {
        self.validate()?;
        let nodes = self.mesh(max_element_m, extra_nodes_m);
        let ndof = 2 * nodes.len();
        // Triplets; repeated entries (shared nodes, supports, discs) are summed into the sparse
        // matrices below.
        let mut kg = nalgebra_sparse::CooMatrix::<f64>::new(ndof, ndof);
        let mut mg = nalgebra_sparse::CooMatrix::<f64>::new(ndof, ndof);
        for e in 0..nodes.len() - 1 {
            let (x0, x1) = (nodes[e], nodes[e + 1]);
            let sec = self.section_at(0.5 * (x0 + x1));
            let (ke, me) = element(sec, sec.material.unwrap_or(self.material), x1 - x0, theory);
            for i in 0..4 {
                for j in 0..4 {
                    kg.push(2 * e + i, 2 * e + j, ke[i][j]);
                    mg.push(2 * e + i, 2 * e + j, me[i][j]);
                }
            }
        }
        let node_of = |p: f64| crate::numeric::nearest_index(&nodes, p);
        for s in &self.supports {
            let n = node_of(s.position_m);
            kg.push(2 * n, 2 * n, s.stiffness_n_per_m);
            kg.push(2 * n + 1, 2 * n + 1, s.rotational_stiffness_n_m_per_rad);
        }
        for d in &self.discs {
            let n = node_of(d.position_m);
            mg.push(2 * n, 2 * n, d.mass_kg);
            mg.push(2 * n + 1, 2 * n + 1, d.transverse_inertia_kg_m2);
        }
        Ok(FeModel {
            nodes_m: nodes,
            k: nalgebra_sparse::CscMatrix::from(&kg),
            m: nalgebra_sparse::CscMatrix::from(&mg),
        })
    }

    /// Node positions: section ends, supports, discs and `extra_nodes_m`, with elements no longer
    /// than `max_element_m` between them.
    pub fn mesh(&self, max_element_m: f64, extra_nodes_m: &[f64]) -> Vec<f64> {
        let l = self.length_m();
        let mut breaks = vec![0.0];
        let mut x = 0.0;
        for s in &self.sections {
            x += s.length_m;
            breaks.push(x);
        }
        for &p in extra_nodes_m
            .iter()
            .chain(self.supports.iter().map(|s| &s.position_m))
            .chain(self.discs.iter().map(|d| &d.position_m))
        {
            if (0.0..=l).contains(&p) {
                breaks.push(p);
            }
        }
        breaks.sort_by(f64::total_cmp);
        breaks.dedup_by(|a, b| (*a - *b).abs() < 1e-9);
        let mut nodes = vec![0.0];
        for w in breaks.windows(2) {
            let k = ((w[1] - w[0]) / max_element_m).ceil().max(1.0) as usize;
            for j in 1..=k {
                nodes.push(w[0] + (w[1] - w[0]) * j as f64 / k as f64);
            }
        }
        nodes
    }

    /// The section holding position `x` m (the last one beyond the end).
    pub fn section_at(&self, x: f64) -> &Section {
        let mut acc = 0.0;
        for s in &self.sections {
            acc += s.length_m;
            if x <= acc {
                return s;
            }
        }
        self.sections
            .last()
            .expect("validated: at least one section")
    }

    /// Lowest `count` modes, with nodes at `extra_nodes_m` and elements ≤ L/`min_elements`.
    pub fn modes(
        &self,
        theory: BeamTheory,
        count: usize,
        min_elements: usize,
        extra_nodes_m: &[f64],
    ) -> Result<(FeModel, Vec<BeamMode>), String> {
        let fe = self.assemble(
            theory,
            self.length_m() / min_elements.max(1) as f64,
            extra_nodes_m,
        )?;
        let modes = fe.solve(
            count,
            self.supports
                .iter()
                .all(|s| s.stiffness_n_per_m == 0.0 && s.rotational_stiffness_n_m_per_rad == 0.0),
        )?;
        Ok((fe, modes))
    }
}

impl FeModel {
    /// Solves K φ = ω² M φ for the lowest `count` modes. `free` marks an unsupported part, whose
    /// two lowest modes are rigid-body modes.
    pub fn solve(&self, count: usize, free: bool) -> Result<Vec<BeamMode>, String> {
        let (values, vectors) = crate::numeric::lowest_modes_sparse(&self.k, &self.m, count)
            .ok_or("the eigenvalue iteration did not converge (non-finite or degenerate model)")?;
        let mut out = Vec::new();
        for (rank, (&w2, phi)) in values.iter().zip(vectors.column_iter()).enumerate() {
            let w2 = w2.max(0.0);
            let mut disp: Vec<f64> = (0..self.nodes_m.len()).map(|n| phi[2 * n]).collect();
            // Sign: make the largest-magnitude displacement positive, so shapes compare stably.
            let big = disp
                .iter()
                .copied()
                .fold(0.0f64, |m, v| if v.abs() > m.abs() { v } else { m });
            if big < 0.0 {
                disp.iter_mut().for_each(|v| *v = -*v);
            }
            out.push(BeamMode {
                frequency_hz: w2.sqrt() / (2.0 * std::f64::consts::PI),
                rigid_body: free && rank < 2,
                displacement: disp,
            });
        }
        Ok(out)
    }

    /// Index of the node at position `x` (within 1 µm), if any.
    pub fn node_at(&self, x: f64) -> Option<usize> {
        self.nodes_m.iter().position(|n| (n - x).abs() < 1e-6)
    }
}

/// A planar element matrix on (w1, ψ1, w2, ψ2).
pub type Planar = [[f64; 4]; 4];

/// Element stiffness and mass (translational + rotary) (Friedman & Kosmatka, Comput. Struct. 47, 1993).
fn element(s: &Section, mat: Material, le: f64, theory: BeamTheory) -> (Planar, Planar) {
    let (k, m, _) = element_with_gyro(s, mat, le, theory);
    (k, m)
}

/// Planar element stiffness and mass on (w1, ψ1, w2, ψ2), and the spinning element's gyroscopic
/// matrix on [u1 v1 θx1 θy1 u2 v2 θx2 θy2] (to be multiplied by the spin speed, rad/s): the
/// polar inertia ρIp = 2ρI per length times the skew arrangement of the rotary-inertia matrix
/// (Nelson 1980, from memory; derivation and sign in rotor-notes §A1, where M q̈ + ΩG q̇ + K q = f).
/// Zero for Euler–Bernoulli elements, which carry no rotary inertia.
pub fn element_with_gyro(
    s: &Section,
    mat: Material,
    le: f64,
    theory: BeamTheory,
) -> (Planar, Planar, [[f64; 8]; 8]) {
    let (d, di) = (s.outer_diameter_m, s.inner_diameter_m);
    let area = std::f64::consts::PI / 4.0 * (d * d - di * di);
    let inertia = std::f64::consts::PI / 64.0 * (d.powi(4) - di.powi(4));
    let e = mat.youngs_modulus_pa;
    let rho = mat.density_kg_m3;
    let g = e / (2.0 * (1.0 + mat.poisson_ratio));
    let (phi, rotary) = match theory {
        BeamTheory::Timoshenko => {
            let kappa = cowper_kappa(mat.poisson_ratio, di / d);
            (12.0 * e * inertia / (kappa * g * area * le * le), true)
        }
        BeamTheory::EulerBernoulli => (0.0, false),
        BeamTheory::Rayleigh => (0.0, true),
    };
    let l = le;
    let c = e * inertia / ((1.0 + phi) * l.powi(3));
    let k = [
        [12.0 * c, 6.0 * l * c, -12.0 * c, 6.0 * l * c],
        [
            6.0 * l * c,
            (4.0 + phi) * l * l * c,
            -6.0 * l * c,
            (2.0 - phi) * l * l * c,
        ],
        [-12.0 * c, -6.0 * l * c, 12.0 * c, -6.0 * l * c],
        [
            6.0 * l * c,
            (2.0 - phi) * l * l * c,
            -6.0 * l * c,
            (4.0 + phi) * l * l * c,
        ],
    ];
    let p2 = phi * phi;
    let mt = rho * area * l / (210.0 * (1.0 + phi).powi(2));
    let m1 = 70.0 * p2 + 147.0 * phi + 78.0;
    let m2 = (35.0 * p2 + 77.0 * phi + 44.0) * l / 4.0;
    let m3 = 35.0 * p2 + 63.0 * phi + 27.0;
    let m4 = (35.0 * p2 + 63.0 * phi + 26.0) * l / 4.0;
    let m5 = (7.0 * p2 + 14.0 * phi + 8.0) * l * l / 4.0;
    let m6 = (7.0 * p2 + 14.0 * phi + 6.0) * l * l / 4.0;
    let mut m = [
        [m1, m2, m3, -m4],
        [m2, m5, m4, -m6],
        [m3, m4, m1, -m2],
        [-m4, -m6, -m2, m5],
    ];
    for row in m.iter_mut() {
        for v in row.iter_mut() {
            *v *= mt;
        }
    }
    let mut gyro = [[0.0; 8]; 8];
    if rotary {
        let mr = rho * inertia / (30.0 * (1.0 + phi).powi(2) * l);
        let a = (3.0 - 15.0 * phi) * l;
        let b = (4.0 + 5.0 * phi + 10.0 * p2) * l * l;
        let cc = (-1.0 - 5.0 * phi + 5.0 * p2) * l * l;
        let r = [
            [36.0, a, -36.0, a],
            [a, b, -a, cc],
            [-36.0, -a, 36.0, -a],
            [a, cc, -a, b],
        ];
        for i in 0..4 {
            for j in 0..4 {
                m[i][j] += mr * r[i][j];
            }
        }
        let g = 2.0 * mr;
        let (b1, b2) = (b, cc);
        let rows = [
            [0.0, 36.0, -a, 0.0, 0.0, -36.0, -a, 0.0],
            [-36.0, 0.0, 0.0, -a, 36.0, 0.0, 0.0, -a],
            [a, 0.0, 0.0, b1, -a, 0.0, 0.0, b2],
            [0.0, a, -b1, 0.0, 0.0, -a, -b2, 0.0],
            [0.0, -36.0, a, 0.0, 0.0, 36.0, a, 0.0],
            [36.0, 0.0, 0.0, a, -36.0, 0.0, 0.0, a],
            [a, 0.0, 0.0, b2, -a, 0.0, 0.0, b1],
            [0.0, a, -b2, 0.0, 0.0, -a, -b1, 0.0],
        ];
        for i in 0..8 {
            for j in 0..8 {
                gyro[i][j] = g * rows[i][j];
            }
        }
    }
    (k, m, gyro)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn solid(l: f64, d: f64) -> Shaft {
        Shaft {
            material: Material::STEEL,
            sections: vec![Section {
                length_m: l,
                outer_diameter_m: d,
                inner_diameter_m: 0.0,
                material: None,
            }],
            discs: vec![],
            supports: vec![],
        }
    }

    #[test]
    fn free_free_matches_field_notes_check_values() {
        // Derived from the closed forms (Blevins 1979, from memory): D = 50 mm, L = 1 m free-free, EB 230.2/634.6/1244.1 Hz,
        // Timoshenko 228.7/622.9/1200.9 Hz.
        let s = solid(1.0, 0.05);
        let (_, eb) = s.modes(BeamTheory::EulerBernoulli, 5, 80, &[]).unwrap();
        let (_, ti) = s.modes(BeamTheory::Timoshenko, 5, 80, &[]).unwrap();
        assert!(eb[0].rigid_body && eb[1].rigid_body && !eb[2].rigid_body);
        for (m, want) in eb[2..5].iter().zip([230.2, 634.6, 1244.1]) {
            assert!(
                (m.frequency_hz / want - 1.0).abs() < 1e-3,
                "{} vs {want}",
                m.frequency_hz
            );
        }
        for (m, want) in ti[2..5].iter().zip([228.7, 622.9, 1200.9]) {
            assert!(
                (m.frequency_hz / want - 1.0).abs() < 2e-3,
                "{} vs {want}",
                m.frequency_hz
            );
        }
    }

    #[test]
    fn kappa_solid() {
        // Cowper 1966 (from memory): 0.886 at ν = 0.3.
        assert!((cowper_kappa(0.3, 0.0) - 0.886).abs() < 1e-3);
    }
}

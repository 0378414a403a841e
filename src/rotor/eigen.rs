//! Damped complex modes of M q̈ + C q̇ + K q = 0 (C and K need not be symmetric: gyroscopic and
//! bearing cross-coupling terms), in state-space form on a reduced basis.
//!
//! The basis is the M-orthonormal undamped modes of the non-spinning model with the bearings'
//! direct stiffness (pseudo-modal reduction, common practice in rotor codes; Friswell et al. 2010,
//! from memory). With the whole basis the reduction is an exact change of coordinates; with the
//! lowest modes only, the few whirl modes wanted converge as the basis grows, and the state matrix
//! stays small enough for a dense real Schur decomposition (nalgebra) at every speed.

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use super::model::NODE_DOFS;
use crate::Complex64;
use crate::numeric::{complex_eigenvalues, eigenvector_near, symmetric_pencil};

/// Direction of whirl relative to the spin.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Whirl {
    /// Orbits turn with the spin.
    Forward,
    /// Orbits turn against the spin.
    Backward,
}

impl Whirl {
    /// "forward" or "backward".
    pub fn word(self) -> &'static str {
        match self {
            Whirl::Forward => "forward",
            Whirl::Backward => "backward",
        }
    }
}

/// A damped mode: eigenvalue λ = σ + iω_d (ω_d > 0) and its shape.
#[derive(Debug, Clone, PartialEq)]
pub struct DampedMode {
    /// The eigenvalue, 1/s.
    pub eigenvalue: Complex64,
    /// Damped natural frequency ω_d/2π, Hz.
    pub frequency_hz: f64,
    /// Damping ratio ζ = −σ/|λ| (negative: unstable).
    pub damping_ratio: f64,
    /// Logarithmic decrement δ = −2πσ/ω_d (negative: unstable).
    pub log_dec: f64,
    /// Whirl direction by the summed node orbits (forward and backward radii |u ± iv|/2 with
    /// time factor e^{iω_d t}, rotor-notes §0), slopes included.
    pub whirl: Whirl,
    /// Share of the orbit radii that whirl forward, 0…1 (0.5: a straight-line orbit).
    pub forward_share: f64,
    /// Physical displacements q̂ (all DOFs), scaled so the largest translation is 1.
    pub shape: DVector<Complex64>,
}

/// A reduction basis: columns M-orthonormal.
#[derive(Debug, Clone)]
pub struct Basis {
    /// n × r.
    pub phi: DMatrix<f64>,
}

impl Basis {
    /// The lowest `keep` undamped modes of K φ = ω² M φ (all of them when `keep` ≥ n), where `k`
    /// should be a symmetric stiffness (the caller's choice of bearings' direct terms), enriched
    /// with the static shapes of unit forces at `attach_dofs` (residual flexibility: a stiff or
    /// heavily damped bearing pins the shaft locally in a way few free modes describe).
    pub fn lowest(
        k: &DMatrix<f64>,
        m: &DMatrix<f64>,
        keep: usize,
        attach_dofs: &[usize],
    ) -> Result<Self, String> {
        const NOT_DEFINITE: &str = "the mass matrix is not positive definite or the model is not \
             finite (a section without mass?)";
        let n = k.nrows();
        let (values, phi) = symmetric_pencil(k, m).ok_or(NOT_DEFINITE)?;
        let keep = keep.clamp(1, n);
        if keep == n || attach_dofs.is_empty() {
            return Ok(Self {
                phi: phi.columns(0, keep).into_owned(),
            });
        }
        // Static shapes (K + σM)⁻¹ e_j, with a small shift for a rotor free to move rigidly.
        let top = values.last().copied().unwrap_or(1.0).abs().max(1.0);
        let shifted = k + m * (1e-8 * top);
        let chol = shifted.cholesky().ok_or(NOT_DEFINITE)?;
        let mut e = DMatrix::<f64>::zeros(n, attach_dofs.len());
        for (j, &d) in attach_dofs.iter().enumerate() {
            e[(d.min(n - 1), j)] = 1.0;
        }
        let psi = chol.solve(&e);
        let mut t = DMatrix::<f64>::zeros(n, keep + psi.ncols());
        t.columns_mut(0, keep).copy_from(&phi.columns(0, keep));
        t.columns_mut(keep, psi.ncols()).copy_from(&psi);
        // An orthonormal basis of the span (dropping static shapes the modes already hold), then
        // the modes of the projected pencil, M-orthonormal again. Columns are brought to unit
        // length first: a static shape is orders of magnitude shorter than a mode.
        for mut c in t.column_iter_mut() {
            let norm = c.norm();
            if norm > 0.0 {
                c /= norm;
            }
        }
        let qr = t.qr();
        let (q, r) = (qr.q(), qr.r());
        let big = (0..r.nrows()).map(|i| r[(i, i)].abs()).fold(0.0, f64::max);
        let cols: Vec<usize> = (0..r.nrows())
            .filter(|&i| r[(i, i)].abs() > 1e-9 * big)
            .collect();
        let q = q.select_columns(&cols);
        let kq = q.tr_mul(&(k * &q));
        let mq = q.tr_mul(&(m * &q));
        let kq = (&kq + kq.transpose()) * 0.5;
        let mq = (&mq + mq.transpose()) * 0.5;
        let (_, y) = symmetric_pencil(&kq, &mq).ok_or(NOT_DEFINITE)?;
        Ok(Self { phi: q * y })
    }
}

/// The lowest `count` whirl modes (ω_d above `min_hz`) of M q̈ + C q̇ + K q = 0 on `basis`.
/// Real (overdamped) roots are not modes of whirl and are left out.
pub fn damped_modes(
    m: &DMatrix<f64>,
    c: &DMatrix<f64>,
    k: &DMatrix<f64>,
    basis: &Basis,
    count: usize,
    min_hz: f64,
    node_span_m: Option<f64>,
) -> Result<Vec<DampedMode>, String> {
    let phi = &basis.phi;
    let r = phi.ncols();
    let mr = phi.tr_mul(&(m * phi));
    let kr = phi.tr_mul(&(k * phi));
    let cr = phi.tr_mul(&(c * phi));
    let chol = mr
        .clone()
        .cholesky()
        .ok_or("the reduced mass matrix is not positive definite")?;
    let mk = chol.solve(&kr);
    let mc = chol.solve(&cr);
    // Balance the state matrix: with z = [S q; q̇], S = diag(√(K_ii/M_ii)), its entries are
    // frequencies instead of squared frequencies, so a stiff DOF (a clamp, a light rotation)
    // does not swamp the round-off of the modes that matter.
    let s: Vec<f64> = (0..r)
        .map(|i| {
            let v = mk[(i, i)].abs().sqrt();
            if v.is_finite() && v > 0.0 { v } else { 1.0 }
        })
        .collect();
    let mut a = DMatrix::<f64>::zeros(2 * r, 2 * r);
    for i in 0..r {
        a[(i, r + i)] = s[i];
        for j in 0..r {
            a[(r + i, j)] = -mk[(i, j)] / s[j];
            a[(r + i, r + j)] = -mc[(i, j)];
        }
    }
    let values = complex_eigenvalues(a.clone())
        .ok_or("the damped eigenvalue iteration did not converge (non-finite model?)")?;
    let min_w = 2.0 * std::f64::consts::PI * min_hz.max(0.0);
    let mut wanted: Vec<Complex64> = values
        .into_iter()
        .filter(|l| l.im > min_w.max(1e-9 * l.norm()) && l.im > 0.0)
        .collect();
    wanted.sort_by(|x, y| x.im.total_cmp(&y.im));
    wanted.truncate(count);
    let ac = a.map(|v| Complex64::new(v, 0.0));
    let phic = phi.map(|v| Complex64::new(v, 0.0));
    let nodes = m.nrows() / NODE_DOFS;
    // Length that turns a slope into a displacement for the whirl sums (1 m for a point model).
    let span = node_span_m.filter(|l| *l > 0.0).unwrap_or(1.0);
    let mut out = Vec::with_capacity(wanted.len());
    for lambda in wanted {
        let z = eigenvector_near(&ac, lambda)
            .ok_or("an eigenvector could not be computed (degenerate model)")?;
        // Undo the balancing: q = S⁻¹ (S q).
        let zq = DVector::<Complex64>::from_fn(r, |i, _| z[i] / s[i]);
        let q = &phic * zq;
        let (mut fwd, mut bwd) = (0.0, 0.0);
        let mut big = Complex64::new(0.0, 0.0);
        for nd in 0..nodes {
            let (u, v) = (q[NODE_DOFS * nd], q[NODE_DOFS * nd + 1]);
            let i = Complex64::new(0.0, 1.0);
            fwd += (u + i * v).norm() / 2.0;
            bwd += (u - i * v).norm() / 2.0;
            // The slope (u′, v′) = (θy, −θx) whirls too; a tilting mode with its centre at rest
            // (a rigid rotor's conical mode) is classified by it, as a motion `span` long.
            let (sx, sy) = (q[NODE_DOFS * nd + 3], -q[NODE_DOFS * nd + 2]);
            fwd += span * (sx + i * sy).norm() / 2.0;
            bwd += span * (sx - i * sy).norm() / 2.0;
            for w in [u, v] {
                if w.norm() > big.norm() {
                    big = w;
                }
            }
        }
        let shape = if big.norm() > 0.0 { q / big } else { q };
        let (sigma, wd) = (lambda.re, lambda.im);
        out.push(DampedMode {
            eigenvalue: lambda,
            frequency_hz: wd / (2.0 * std::f64::consts::PI),
            damping_ratio: -sigma / lambda.norm(),
            log_dec: -2.0 * std::f64::consts::PI * sigma / wd,
            whirl: if fwd >= bwd {
                Whirl::Forward
            } else {
                Whirl::Backward
            },
            forward_share: if fwd + bwd > 0.0 {
                fwd / (fwd + bwd)
            } else {
                0.5
            },
            shape,
        });
    }
    Ok(out)
}

/// Complex modal assurance criterion |aᴴb|² / (|a|²|b|²) of two shapes.
pub fn complex_mac(a: &DVector<Complex64>, b: &DVector<Complex64>) -> f64 {
    let ab = a.dotc(b).norm_sqr();
    let aa = a.norm_squared();
    let bb = b.norm_squared();
    if aa > 0.0 && bb > 0.0 {
        ab / (aa * bb)
    } else {
        0.0
    }
}

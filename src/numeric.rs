//! Small numeric helpers, and guarded dense linear algebra: every iterative decomposition here is bounded and refuses
//! non-finite input.
//!
//! nalgebra's SVD, Schur and symmetric eigen solvers iterate until convergence by default; on a
//! matrix holding NaN or ±∞ they never converge and the caller hangs. Every decomposition in the
//! crate's numerics goes through these wrappers, which check the input and cap the iterations,
//! so a poisoned record costs one station or one mode, never the whole test.

use nalgebra::{DMatrix, DVector, SVD, Schur, SymmetricEigen};

use crate::Complex64;

/// Iterations allowed per row of the matrix: QR-type sweeps need a few per eigenvalue.
const SWEEPS_PER_ROW: usize = 60;

/// The upper median (element `len / 2` in sorted order); `None` for no values.
pub fn median(mut v: Vec<f64>) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    let m = v.len() / 2;
    Some(*v.select_nth_unstable_by(m, f64::total_cmp).1)
}

/// Whether every entry is finite.
pub fn all_finite(m: &DMatrix<f64>) -> bool {
    m.iter().all(|v| v.is_finite())
}

/// Least-squares solution of `a x = b` by SVD, singular values below `eps · σ_max` dropped;
/// `None` for non-finite input or when the SVD does not converge.
pub fn svd_solve(a: DMatrix<f64>, b: &DVector<f64>, eps: f64) -> Option<DVector<f64>> {
    if !all_finite(&a) || !b.iter().all(|v| v.is_finite()) {
        return None;
    }
    let iters = SWEEPS_PER_ROW * a.nrows().max(a.ncols()).max(4);
    let svd = SVD::try_new(a, true, true, f64::EPSILON, iters)?;
    let top = svd.singular_values.iter().fold(0.0f64, |m, &v| m.max(v));
    let x = svd.solve(b, eps * top).ok()?;
    x.iter().all(|v| v.is_finite()).then_some(x)
}

/// Eigenvalues of a general real square matrix (real Schur form); `None` for non-finite input
/// or when the iteration does not converge.
pub fn complex_eigenvalues(m: DMatrix<f64>) -> Option<Vec<Complex64>> {
    if !all_finite(&m) {
        return None;
    }
    let iters = SWEEPS_PER_ROW * m.nrows().max(4);
    let schur = Schur::try_new(m, f64::EPSILON, iters)?;
    let ev = schur.complex_eigenvalues();
    let out: Vec<Complex64> = ev.iter().map(|c| Complex64::new(c.re, c.im)).collect();
    out.iter()
        .all(|c| c.re.is_finite() && c.im.is_finite())
        .then_some(out)
}

/// Eigen-decomposition of a real symmetric matrix; `None` for non-finite input or when the
/// iteration does not converge.
pub fn symmetric_eigen(m: DMatrix<f64>) -> Option<SymmetricEigen<f64, nalgebra::Dyn>> {
    if !all_finite(&m) {
        return None;
    }
    let iters = SWEEPS_PER_ROW * m.nrows().max(4);
    SymmetricEigen::try_new(m, f64::EPSILON, iters)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn non_finite_input_returns_none_at_once() {
        let mut m = DMatrix::<f64>::identity(6, 6);
        m[(2, 3)] = f64::NAN;
        assert!(complex_eigenvalues(m.clone()).is_none());
        assert!(symmetric_eigen(m.clone()).is_none());
        assert!(svd_solve(m, &DVector::from_element(6, 1.0), 1e-12).is_none());
        let mut m = DMatrix::<f64>::identity(6, 6);
        m[(0, 0)] = f64::INFINITY;
        assert!(svd_solve(m, &DVector::from_element(6, 1.0), 1e-12).is_none());
    }

    #[test]
    fn rotation_has_unit_complex_eigenvalues() {
        // [[0, -1], [1, 0]] has eigenvalues ±j (definition of a rotation by 90°).
        let m = DMatrix::from_row_slice(2, 2, &[0.0, -1.0, 1.0, 0.0]);
        let mut ev = complex_eigenvalues(m).expect("converges");
        ev.sort_by(|a, b| a.im.total_cmp(&b.im));
        assert!((ev[0] - Complex64::new(0.0, -1.0)).norm() < 1e-12);
        assert!((ev[1] - Complex64::new(0.0, 1.0)).norm() < 1e-12);
    }
}

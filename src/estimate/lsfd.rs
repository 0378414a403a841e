//! Least-squares frequency-domain residues with lower and upper residuals (Peeters et al. 2004,
//! from memory), for accelerance measured through an exponential window.
//!
//! The windowed records' FRF is s'²·α(s') with s' = jω + 1/τ (Laplace shift); the measured poles are
//! λ' = λ − 1/τ. Fitting A(ω) = s'²·Σ_r [R_r/(jω − λ'_r) + R_r*/(jω − λ'_r*)] + LR + s'²·UR therefore
//! returns the residues R_r of the structure itself, unbiased by the window.

use nalgebra::{DMatrix, DVector};

use crate::Complex64;

const TAU: f64 = 2.0 * std::f64::consts::PI;

/// LSFD result for one output.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputFit {
    /// Receptance residue of each pole (m/N·rad/s).
    pub residues: Vec<Complex64>,
    /// Lower residual (mass line), (m/s²)/N.
    pub lower: f64,
    /// Upper residual (residual flexibility), m/N.
    pub upper: f64,
    /// The synthesized FRF at the fitted lines.
    pub synthesized: Vec<Complex64>,
    /// Σ|H − H_syn|² / Σ|H|² over the band.
    pub fit_error: f64,
    /// The weighted residual Σ W²|H − H_syn|² that the fit minimised.
    pub weighted_residual: f64,
}

/// One line of the LSFD basis at `f_hz`: for each pole the real and imaginary parts of its
/// residue's term s'²·[1/(jω − λ') ± 1/(jω − λ'*)], then the lower residual (1) and the upper
/// residual (s'²), with s' = jω + 1/τ.
fn basis_row(f_hz: f64, lambda: &[Complex64], exp_tau_s: f64) -> Vec<Complex64> {
    let inv_tau = if exp_tau_s.is_finite() {
        1.0 / exp_tau_s
    } else {
        0.0
    };
    let w = TAU * f_hz;
    let s = Complex64::new(0.0, w);
    let sp = Complex64::new(inv_tau, w);
    let m = sp * sp;
    let mut b = Vec::with_capacity(2 * lambda.len() + 2);
    for l in lambda {
        let g1 = 1.0 / (s - l);
        let g2 = 1.0 / (s - l.conj());
        b.push(m * (g1 + g2));
        b.push(m * Complex64::new(0.0, 1.0) * (g1 - g2));
    }
    b.push(Complex64::new(1.0, 0.0));
    b.push(m);
    b
}

/// Fits residues for fixed measured poles `lambda` (rad/s, upper half plane) to one output's FRF.
pub fn fit_output(
    freq_hz: &[f64],
    h: &[Complex64],
    weight: &[f64],
    lambda: &[Complex64],
    exp_tau_s: f64,
) -> Option<OutputFit> {
    let rows = basis_rows(freq_hz, lambda, exp_tau_s);
    fit_one(&rows, h, weight, lambda.len())
}

/// [`fit_output`] for many outputs over the same lines: the basis (the same for every output)
/// is formed once and the outputs are fitted on parallel threads. `None` names the first output
/// whose fit is singular (`Err(index)`).
pub fn fit_outputs(
    freq_hz: &[f64],
    h: &[&[Complex64]],
    weight: &[&[f64]],
    lambda: &[Complex64],
    exp_tau_s: f64,
) -> Result<Vec<OutputFit>, usize> {
    let rows = basis_rows(freq_hz, lambda, exp_tau_s);
    let n = lambda.len();
    let workers = std::thread::available_parallelism().map_or(1, |n| n.get());
    let idx: Vec<usize> = (0..h.len()).collect();
    let chunk = h.len().div_ceil(workers).max(1);
    let fits: Vec<Option<OutputFit>> = if workers < 2 || h.len() < 4 {
        idx.iter()
            .map(|&o| fit_one(&rows, h[o], weight[o], n))
            .collect()
    } else {
        std::thread::scope(|scope| {
            let rows = &rows;
            let handles: Vec<_> = idx
                .chunks(chunk)
                .map(|os| {
                    scope.spawn(move || {
                        os.iter()
                            .map(|&o| fit_one(rows, h[o], weight[o], n))
                            .collect::<Vec<_>>()
                    })
                })
                .collect();
            handles
                .into_iter()
                .flat_map(|t| t.join().unwrap_or_default())
                .collect()
        })
    };
    if fits.len() != h.len() {
        return Err(0);
    }
    fits.into_iter()
        .enumerate()
        .map(|(o, f)| f.ok_or(o))
        .collect()
}

fn basis_rows(freq_hz: &[f64], lambda: &[Complex64], exp_tau_s: f64) -> Vec<Vec<Complex64>> {
    freq_hz
        .iter()
        .map(|&f| basis_row(f, lambda, exp_tau_s))
        .collect()
}

/// The real-valued LSFD basis: each line's row weighted, its real and imaginary parts as two
/// rows, every column scaled to unit norm (the modal and residual terms span many decades, and
/// unscaled normal equations would lose them). Returns the matrix and the scale of each column
/// (coefficient of the unscaled column = solution × scale); `None` for non-finite values.
fn weighted_basis<'a>(
    rows: impl ExactSizeIterator<Item = &'a [Complex64]>,
    weight: &[f64],
    cols: usize,
) -> Option<(DMatrix<f64>, Vec<f64>)> {
    let mut b = DMatrix::<f64>::zeros(2 * rows.len(), cols);
    for (k, (row, &w)) in rows.zip(weight).enumerate() {
        for (c, v) in row.iter().enumerate() {
            b[(2 * k, c)] = w * v.re;
            b[(2 * k + 1, c)] = w * v.im;
        }
    }
    let mut scale = vec![1.0f64; cols];
    for (c, mut col) in b.column_iter_mut().enumerate() {
        let nrm = col.norm();
        if nrm > 0.0 {
            col /= nrm;
            scale[c] = 1.0 / nrm;
        }
    }
    crate::numeric::all_finite(&b).then_some((b, scale))
}

fn fit_one(
    rows: &[Vec<Complex64>],
    h: &[Complex64],
    weight: &[f64],
    n: usize,
) -> Option<OutputFit> {
    let cols = 2 * n + 2;
    // Solved by its normal equations.
    let (b, scale) = weighted_basis(rows.iter().map(Vec::as_slice), weight, cols)?;
    let mut y = DVector::<f64>::zeros(2 * rows.len());
    for (k, (&w, hk)) in weight.iter().zip(h).enumerate() {
        y[2 * k] = w * hk.re;
        y[2 * k + 1] = w * hk.im;
    }
    if !y.iter().all(|v| v.is_finite()) {
        return None;
    }
    let ata = b.tr_mul(&b);
    let atb = b.tr_mul(&y);
    let x = ata
        .clone()
        .cholesky()
        .map(|c| c.solve(&atb))
        .or_else(|| crate::numeric::svd_solve(ata, &atb, 1e-12))?;
    let coef: Vec<f64> = (0..cols).map(|i| x[i] * scale[i]).collect();
    let residues: Vec<Complex64> = (0..n)
        .map(|r| Complex64::new(coef[2 * r], coef[2 * r + 1]))
        .collect();
    let synthesized: Vec<Complex64> = rows
        .iter()
        .map(|b| b.iter().zip(&coef).map(|(v, c)| v * *c).sum())
        .collect();
    let num: f64 = h
        .iter()
        .zip(&synthesized)
        .map(|(a, b)| (a - b).norm_sqr())
        .sum();
    let den: f64 = h.iter().map(|a| a.norm_sqr()).sum();
    let weighted_residual: f64 = h
        .iter()
        .zip(&synthesized)
        .zip(weight)
        .map(|((a, b), w)| w * w * (a - b).norm_sqr())
        .sum();
    Some(OutputFit {
        residues,
        lower: coef[2 * n],
        upper: coef[2 * n + 1],
        synthesized,
        fit_error: if den > 0.0 { num / den } else { 0.0 },
        weighted_residual,
    })
}

/// The measured data of a narrow band shared by many LSFD residual evaluations (the nonlinear
/// pole refinement): lines, one weight per line shared by the outputs, and the weighted FRFs of
/// every output stacked as real and imaginary rows (2·lines × outputs), each output's column
/// already multiplied by its scale.
pub struct LocalBand {
    freq_hz: Vec<f64>,
    line_weight: Vec<f64>,
    weighted_h: DMatrix<f64>,
}

impl LocalBand {
    /// Gathers lines `lines` of every output `h`, weighted by `line_weight` (per line) and
    /// `output_scale` (per output).
    pub fn new(
        freq_hz: &[f64],
        h: &[Vec<Complex64>],
        lines: std::ops::Range<usize>,
        line_weight: &[f64],
        output_scale: &[f64],
    ) -> Self {
        let l = lines.len();
        let lw = line_weight[lines.clone()].to_vec();
        let mut weighted_h = DMatrix::<f64>::zeros(2 * l, h.len());
        for (o, (ho, so)) in h.iter().zip(output_scale).enumerate() {
            for (k, (hk, w)) in ho[lines.clone()].iter().zip(&lw).enumerate() {
                weighted_h[(2 * k, o)] = so * w * hk.re;
                weighted_h[(2 * k + 1, o)] = so * w * hk.im;
            }
        }
        LocalBand {
            freq_hz: freq_hz[lines].to_vec(),
            line_weight: lw,
            weighted_h,
        }
    }

    /// The summed weighted residual Σ_o s_o² Σ_k w_k² |H_ok − H_syn,ok|² of LSFD fits of every
    /// output with poles `lambda`. Sharing the line weights lets every output use one basis and
    /// one factorised normal matrix, so all outputs are solved as one matrix right-hand side:
    /// what makes the nonlinear pole refinement affordable on many stations. The residual is
    /// formed explicitly (not as ‖h‖² − bᵀx) so a near-perfect fit keeps its digits.
    pub fn residual(&self, lambda: &[Complex64], exp_tau_s: f64) -> Option<f64> {
        let cols = 2 * lambda.len() + 2;
        let rows: Vec<Vec<Complex64>> = self
            .freq_hz
            .iter()
            .map(|&f| basis_row(f, lambda, exp_tau_s))
            .collect();
        let (basis, _) = weighted_basis(rows.iter().map(Vec::as_slice), &self.line_weight, cols)?;
        let ata = basis.tr_mul(&basis);
        let atb = basis.tr_mul(&self.weighted_h);
        let x = match ata.clone().cholesky() {
            Some(c) => c.solve(&atb),
            None => {
                let mut x = DMatrix::<f64>::zeros(cols, atb.ncols());
                for (o, b) in atb.column_iter().enumerate() {
                    let xo = crate::numeric::svd_solve(ata.clone(), &b.into_owned(), 1e-12)?;
                    x.set_column(o, &xo);
                }
                x
            }
        };
        let r = &self.weighted_h - &basis * x;
        let total = r.norm_squared();
        total.is_finite().then_some(total)
    }
}

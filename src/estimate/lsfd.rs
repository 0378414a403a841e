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
    fit_outputs(freq_hz, &[h], &[weight], lambda, exp_tau_s)
        .ok()?
        .pop()
}

/// Lines per block of the normal-equation sums: small enough that a block's products stay in
/// cache, large enough for the matrix products to run at full speed.
const BLOCK: usize = 256;

/// [`fit_output`] for many outputs over the same lines. `Err` names the first output whose fit
/// is singular or not finite.
///
/// Every output shares the basis and has its own line weights W, so output o's normal matrix is
/// Σ_k W_ok²·Re(b̄_k b_kᵀ): the products of the basis columns at each line, weighted. Those
/// products are formed once per line and summed for every output at once as one matrix product
/// (products × lines)·(lines × outputs), block by block; the right-hand sides and the synthesis
/// are matrix products too. Each output's system is then scaled to unit diagonal (the modal and
/// residual terms span many decades) and solved by Cholesky, or by SVD where that fails.
pub fn fit_outputs(
    freq_hz: &[f64],
    h: &[&[Complex64]],
    weight: &[&[f64]],
    lambda: &[Complex64],
    exp_tau_s: f64,
) -> Result<Vec<OutputFit>, usize> {
    let n = lambda.len();
    let cols = 2 * n + 2;
    let (nl, no) = (freq_hz.len(), h.len());
    if no == 0 {
        return Ok(Vec::new());
    }
    if h.iter().any(|v| v.len() != nl) || weight.iter().any(|v| v.len() != nl) {
        return Err(0);
    }
    let rows: Vec<Vec<Complex64>> = freq_hz
        .iter()
        .map(|&f| basis_row(f, lambda, exp_tau_s))
        .collect();
    let pairs: Vec<(usize, usize)> = (0..cols)
        .flat_map(|i| (i..cols).map(move |j| (i, j)))
        .collect();
    // Contiguous ranges of lines, one per core, each summed block by block.
    let ranges = crate::numeric::core_ranges(nl, BLOCK);
    let sums = crate::numeric::par_map(&ranges, |&(r0, r1)| {
        let mut gram = DMatrix::<f64>::zeros(pairs.len(), no);
        let mut rhs = DMatrix::<f64>::zeros(cols, no);
        let mut prod = DMatrix::<f64>::zeros(pairs.len(), BLOCK);
        let mut b_re = DMatrix::<f64>::zeros(cols, BLOCK);
        let mut b_im = DMatrix::<f64>::zeros(cols, BLOCK);
        let mut w2 = DMatrix::<f64>::zeros(BLOCK, no);
        let mut z_re = DMatrix::<f64>::zeros(BLOCK, no);
        let mut z_im = DMatrix::<f64>::zeros(BLOCK, no);
        for k0 in (r0..r1).step_by(BLOCK) {
            let kb = (r1 - k0).min(BLOCK);
            for k in 0..kb {
                let row = &rows[k0 + k];
                for (p, &(i, j)) in pairs.iter().enumerate() {
                    prod[(p, k)] = row[i].re * row[j].re + row[i].im * row[j].im;
                }
                for (c, v) in row.iter().enumerate() {
                    b_re[(c, k)] = v.re;
                    b_im[(c, k)] = v.im;
                }
            }
            for o in 0..no {
                for k in 0..kb {
                    let w = weight[o][k0 + k];
                    let z = h[o][k0 + k] * (w * w);
                    w2[(k, o)] = w * w;
                    z_re[(k, o)] = z.re;
                    z_im[(k, o)] = z.im;
                }
            }
            gram.gemm(1.0, &prod.columns(0, kb), &w2.rows(0, kb), 1.0);
            rhs.gemm(1.0, &b_re.columns(0, kb), &z_re.rows(0, kb), 1.0);
            rhs.gemm(1.0, &b_im.columns(0, kb), &z_im.rows(0, kb), 1.0);
        }
        (gram, rhs)
    });
    let (gram, rhs) = sums
        .into_iter()
        .reduce(|(g1, r1), (g2, r2)| (g1 + g2, r1 + r2))
        .unwrap_or_else(|| {
            (
                DMatrix::<f64>::zeros(pairs.len(), no),
                DMatrix::<f64>::zeros(cols, no),
            )
        });
    let mut coef = DMatrix::<f64>::zeros(cols, no);
    for o in 0..no {
        let mut a = DMatrix::<f64>::zeros(cols, cols);
        for (p, &(i, j)) in pairs.iter().enumerate() {
            a[(i, j)] = gram[(p, o)];
            a[(j, i)] = gram[(p, o)];
        }
        let scale: Vec<f64> = (0..cols)
            .map(|i| {
                let d = a[(i, i)];
                if d > 0.0 { 1.0 / d.sqrt() } else { 1.0 }
            })
            .collect();
        for i in 0..cols {
            for j in 0..cols {
                a[(i, j)] *= scale[i] * scale[j];
            }
        }
        let b = DVector::from_iterator(cols, (0..cols).map(|i| rhs[(i, o)] * scale[i]));
        if !crate::numeric::all_finite(&a) || !b.iter().all(|v| v.is_finite()) {
            return Err(o);
        }
        let x = a
            .clone()
            .cholesky()
            .map(|c| c.solve(&b))
            .or_else(|| crate::numeric::svd_solve(a, &b, 1e-12))
            .ok_or(o)?;
        for i in 0..cols {
            coef[(i, o)] = x[i] * scale[i];
        }
    }
    // The synthesis: real and imaginary parts of the basis times every output's coefficients,
    // each range of lines on its own core.
    let parts = crate::numeric::par_map(&ranges, |&(r0, r1)| {
        let mut syn_re = DMatrix::<f64>::zeros(r1 - r0, no);
        let mut syn_im = DMatrix::<f64>::zeros(r1 - r0, no);
        let mut bt_re = DMatrix::<f64>::zeros(BLOCK, cols);
        let mut bt_im = DMatrix::<f64>::zeros(BLOCK, cols);
        for k0 in (r0..r1).step_by(BLOCK) {
            let kb = (r1 - k0).min(BLOCK);
            for c in 0..cols {
                for k in 0..kb {
                    let v = rows[k0 + k][c];
                    bt_re[(k, c)] = v.re;
                    bt_im[(k, c)] = v.im;
                }
            }
            syn_re
                .rows_mut(k0 - r0, kb)
                .gemm(1.0, &bt_re.rows(0, kb), &coef, 0.0);
            syn_im
                .rows_mut(k0 - r0, kb)
                .gemm(1.0, &bt_im.rows(0, kb), &coef, 0.0);
        }
        (syn_re, syn_im)
    });
    Ok((0..no)
        .map(|o| {
            let synthesized: Vec<Complex64> = parts
                .iter()
                .flat_map(|(re, im)| {
                    (0..re.nrows()).map(move |k| Complex64::new(re[(k, o)], im[(k, o)]))
                })
                .collect();
            let (mut num, mut den, mut weighted_residual) = (0.0, 0.0, 0.0);
            for ((a, b), w) in h[o].iter().zip(&synthesized).zip(weight[o]) {
                let e = (a - b).norm_sqr();
                num += e;
                den += a.norm_sqr();
                weighted_residual += w * w * e;
            }
            OutputFit {
                residues: (0..n)
                    .map(|r| Complex64::new(coef[(2 * r, o)], coef[(2 * r + 1, o)]))
                    .collect(),
                lower: coef[(2 * n, o)],
                upper: coef[(2 * n + 1, o)],
                synthesized,
                fit_error: if den > 0.0 { num / den } else { 0.0 },
                weighted_residual,
            }
        })
        .collect())
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

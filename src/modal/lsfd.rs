//! Least-squares frequency-domain residues with lower and upper residuals (Peeters et al. 2004,
//! from memory; field notes §3), for accelerance measured through an exponential window.
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
    let n = lambda.len();
    let cols = 2 * n + 2;
    let basis = |f: f64| basis_row(f, lambda, exp_tau_s);
    // Normal equations of the real-valued problem, with columns scaled to unit norm for
    // conditioning (the basis spans many decades).
    let mut ata = DMatrix::<f64>::zeros(cols, cols);
    let mut atb = DVector::<f64>::zeros(cols);
    let rows: Vec<Vec<Complex64>> = freq_hz.iter().map(|&f| basis(f)).collect();
    let mut scale = vec![0.0f64; cols];
    for (k, b) in rows.iter().enumerate() {
        let w2 = weight[k] * weight[k];
        for (c, v) in b.iter().enumerate() {
            scale[c] += w2 * v.norm_sqr();
        }
    }
    let scale: Vec<f64> = scale
        .iter()
        .map(|s| if *s > 0.0 { 1.0 / s.sqrt() } else { 1.0 })
        .collect();
    for (k, b) in rows.iter().enumerate() {
        let w2 = weight[k] * weight[k];
        for i in 0..cols {
            let bi = b[i] * scale[i];
            atb[i] += w2 * (bi.re * h[k].re + bi.im * h[k].im);
            for j in i..cols {
                let bj = b[j] * scale[j];
                ata[(i, j)] += w2 * (bi.re * bj.re + bi.im * bj.im);
            }
        }
    }
    for i in 0..cols {
        for j in 0..i {
            ata[(i, j)] = ata[(j, i)];
        }
    }
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

/// The summed weighted residual Σ_o s_o² Σ_k w_k² |H_ok − H_syn,ok|² of LSFD fits of every output
/// over lines `lines`, with one weight per line shared by the outputs (`line_weight`) and a
/// scale per output (`output_scale`). Sharing the line weights lets every output use one basis
/// and one factorised normal matrix, so the cost per output is a right-hand side and a residual
/// instead of a whole fit: what makes the nonlinear pole refinement affordable on many stations.
pub fn shared_weighted_residual(
    freq_hz: &[f64],
    h: &[Vec<Complex64>],
    lines: std::ops::Range<usize>,
    line_weight: &[f64],
    output_scale: &[f64],
    lambda: &[Complex64],
    exp_tau_s: f64,
) -> Option<f64> {
    let n = lambda.len();
    let cols = 2 * n + 2;
    let rows: Vec<Vec<Complex64>> = freq_hz[lines.clone()]
        .iter()
        .map(|&f| basis_row(f, lambda, exp_tau_s))
        .collect();
    let lw = &line_weight[lines.clone()];
    let mut scale = vec![0.0f64; cols];
    for (b, w) in rows.iter().zip(lw) {
        for (c, v) in b.iter().enumerate() {
            scale[c] += w * w * v.norm_sqr();
        }
    }
    let scale: Vec<f64> = scale
        .iter()
        .map(|s| if *s > 0.0 { 1.0 / s.sqrt() } else { 1.0 })
        .collect();
    let rows: Vec<Vec<Complex64>> = rows
        .into_iter()
        .map(|b| b.iter().zip(&scale).map(|(v, s)| v * *s).collect())
        .collect();
    let mut ata = DMatrix::<f64>::zeros(cols, cols);
    for (b, w) in rows.iter().zip(lw) {
        let w2 = w * w;
        for i in 0..cols {
            for j in i..cols {
                ata[(i, j)] += w2 * (b[i].re * b[j].re + b[i].im * b[j].im);
            }
        }
    }
    for i in 0..cols {
        for j in 0..i {
            ata[(i, j)] = ata[(j, i)];
        }
    }
    if !crate::numeric::all_finite(&ata) {
        return None;
    }
    let chol = ata.clone().cholesky();
    let mut total = 0.0;
    for (ho, so) in h.iter().zip(output_scale) {
        let ho = &ho[lines.clone()];
        let mut atb = DVector::<f64>::zeros(cols);
        for ((b, w), hk) in rows.iter().zip(lw).zip(ho) {
            let w2 = w * w;
            for i in 0..cols {
                atb[i] += w2 * (b[i].re * hk.re + b[i].im * hk.im);
            }
        }
        let x = match &chol {
            Some(c) => c.solve(&atb),
            None => crate::numeric::svd_solve(ata.clone(), &atb, 1e-12)?,
        };
        let r: f64 = rows
            .iter()
            .zip(lw)
            .zip(ho)
            .map(|((b, w), hk)| {
                let syn: Complex64 = b.iter().zip(x.iter()).map(|(v, c)| v * *c).sum();
                w * w * (hk - syn).norm_sqr()
            })
            .sum();
        total += so * so * r;
    }
    total.is_finite().then_some(total)
}

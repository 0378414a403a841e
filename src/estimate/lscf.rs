//! Least-squares complex frequency-domain estimator, single-reference form (Guillaume et al.,
//! IMAC XXI 2003; z-domain derivation per Fasana, MSSP 23, 2009), with
//! the stabilization diagram over every model order up to `max_order`.
//!
//! Speed: the normal-equation blocks R_o, S_o, T_o are Toeplitz in the z-domain basis, so they come
//! from 4 sums of length p_max + 1 per output; the blocks of lower orders are their leading
//! sub-blocks, and with R_o = L Lᵀ the reduced matrix of order p needs only the first p + 1 rows of
//! X_o = L⁻¹S_o. One Cholesky and one triangular solve per output serve every order.

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

use super::shape::{mac, mpc};
use crate::Complex64;

const TAU: f64 = 2.0 * std::f64::consts::PI;

/// Criteria for calling a pole stable between successive orders (common practice: 1 %, 5 %, 0.98).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct StabilityCriteria {
    /// Largest relative frequency change.
    pub frequency: f64,
    /// Largest relative damping change.
    pub damping: f64,
    /// Smallest MAC between the shapes.
    pub mac: f64,
}

impl Default for StabilityCriteria {
    fn default() -> Self {
        Self {
            frequency: 0.01,
            damping: 0.05,
            mac: 0.98,
        }
    }
}

/// How a pole compares with the nearest pole of the previous order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum PoleStatus {
    /// No pole of the previous order is close.
    New,
    /// Frequency stable.
    Frequency,
    /// Frequency and damping stable.
    FrequencyDamping,
    /// Frequency, damping and shape stable.
    FrequencyDampingShape,
}

impl PoleStatus {
    /// Stable word used in files.
    pub fn word(self) -> &'static str {
        match self {
            PoleStatus::New => "new",
            PoleStatus::Frequency => "frequency",
            PoleStatus::FrequencyDamping => "frequency_damping",
            PoleStatus::FrequencyDampingShape => "frequency_damping_shape",
        }
    }
}

/// A pole of one model order.
#[derive(Debug, Clone, PartialEq)]
pub struct Pole {
    /// Model order it came from.
    pub order: usize,
    /// Continuous-time pole λ (rad/s) of the data as measured (exponential window included).
    pub lambda: Complex64,
    /// |λ|/2π, Hz.
    pub frequency_hz: f64,
    /// −Re λ/|λ| as measured.
    pub damping_ratio: f64,
    /// Comparison with the previous order.
    pub status: PoleStatus,
    /// Unscaled shape over the outputs, B_o(z) at the pole.
    pub shape: Vec<Complex64>,
    /// MPC of that shape.
    pub mpc: f64,
}

/// Every pole of every order.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Stabilization {
    /// Poles, by order then frequency.
    pub poles: Vec<Pole>,
    /// Highest order computed.
    pub max_order: usize,
}

/// One output's share of the reduced normal equations from its sums over lines
/// r_d = Σ W²·Re z^d, s_d = Re Σ W²·H·z^d, u_d = Re Σ W²·H*·z^d, t_d = Σ W²|H|²·Re z^d:
/// the Cholesky factor L of R_o, L⁻¹S_o, and T_o.
#[allow(clippy::type_complexity)]
fn output_factor(
    o: usize,
    r: &[f64],
    s: &[f64],
    u: &[f64],
    t: &[f64],
    np: usize,
) -> Result<(DMatrix<f64>, DMatrix<f64>, DMatrix<f64>), String> {
    let rm = DMatrix::from_fn(np, np, |i, j| r[i.abs_diff(j)]);
    let sm = DMatrix::from_fn(np, np, |i, j| if j >= i { -s[j - i] } else { -u[i - j] });
    let tm = DMatrix::from_fn(np, np, |i, j| t[i.abs_diff(j)]);
    // A narrow band far from 0 Hz leaves R_o numerically singular at high orders; a tiny ridge
    // keeps the low orders exact, and the high orders' poles then fail the stability tests.
    let top = (0..np).map(|i| rm[(i, i)]).fold(0.0f64, f64::max);
    let chol = [0.0, 1e-13, 1e-11, 1e-9]
        .iter()
        .find_map(|&ridge| {
            let mut m = rm.clone();
            for i in 0..np {
                m[(i, i)] += ridge * top;
            }
            m.cholesky()
        })
        .ok_or_else(|| {
            format!("output {o}: the weighted basis is singular (too few valid lines?)")
        })?;
    let l = chol.l();
    let x = l
        .solve_lower_triangular(&sm)
        .ok_or_else(|| format!("output {o}: singular factor"))?;
    Ok((l, x, tm))
}

/// Runs LSCF for orders 1..=`max_order` on FRFs `h[o][k]` at `freq_hz[k]` with per-line weights
/// `weight[o][k]` (W, not W²). Poles outside the band or unstable are dropped.
///
/// # Panics
/// If the arrays disagree in size (a bug in the caller).
pub fn stabilization(
    freq_hz: &[f64],
    h: &[Vec<Complex64>],
    weight: &[Vec<f64>],
    max_order: usize,
    criteria: StabilityCriteria,
) -> Result<Stabilization, String> {
    stabilization_from(freq_hz, h, weight, 1, max_order, criteria)
}

/// [`stabilization`] for orders `first_order..=max_order` only (the order below `first_order` is
/// solved too, so that the first order's poles are classified): for a caller that needs the
/// poles of the highest orders, not a diagram.
///
/// # Panics
/// If the arrays disagree in size (a bug in the caller).
pub fn stabilization_from(
    freq_hz: &[f64],
    h: &[Vec<Complex64>],
    weight: &[Vec<f64>],
    first_order: usize,
    max_order: usize,
    criteria: StabilityCriteria,
) -> Result<Stabilization, String> {
    let nf = freq_hz.len();
    let no = h.len();
    assert!(no > 0 && weight.len() == no && h.iter().all(|v| v.len() == nf));
    let finite = h
        .iter()
        .flatten()
        .all(|c| c.re.is_finite() && c.im.is_finite())
        && weight.iter().flatten().all(|w| w.is_finite())
        && freq_hz.iter().all(|f| f.is_finite());
    if !finite {
        return Err("the FRFs hold values that are not numbers (NaN or ∞)".into());
    }
    if nf < 2 * max_order + 2 {
        return Err(format!(
            "the band holds {nf} lines, too few for model order {max_order} (need ≥ {})",
            2 * max_order + 2
        ));
    }
    let (f_lo, f_hi) = (freq_hz[0], freq_hz[nf - 1]);
    let dt = 1.0 / (2.0 * f_hi);
    let z: Vec<Complex64> = freq_hz
        .iter()
        .map(|f| Complex64::from_polar(1.0, TAU * f * dt))
        .collect();
    let np = max_order + 1;

    // Per output: R_o (to factor), X_o = L⁻¹S_o, and T_o (summed). Their entries are sums over
    // lines of powers of z times W², W²H and W²|H|².
    let (re_sums, im_sums) = line_sums(&z, h, weight, np);
    // Each output's factor is its own: spread over the cores.
    let outputs: Vec<usize> = (0..no).collect();
    let per_output = crate::numeric::par_map(&outputs, |&o| {
        let col = |m: &DMatrix<f64>, c: usize| -> Vec<f64> { (0..np).map(|d| m[(d, c)]).collect() };
        let (re_h, im_h) = (col(&re_sums, 3 * o + 1), col(&im_sums, o));
        let s: Vec<f64> = re_h.iter().zip(&im_h).map(|(a, b)| a - b).collect();
        let u: Vec<f64> = re_h.iter().zip(&im_h).map(|(a, b)| a + b).collect();
        output_factor(
            o,
            &col(&re_sums, 3 * o),
            &s,
            &u,
            &col(&re_sums, 3 * o + 2),
            np,
        )
    });
    let mut tsum = DMatrix::<f64>::zeros(np, np);
    let mut factors: Vec<(DMatrix<f64>, DMatrix<f64>)> = Vec::with_capacity(no);
    for f in per_output {
        let (l, x, t) = f?;
        tsum += t;
        factors.push((l, x));
    }

    // The reduced normal matrix of every order, in turn: rank-one updates with row p of every
    // X_o leave gsum's leading (p+1)-block equal to Σ_o S_oᵀ R_o⁻¹ S_o of order p. (Forming
    // each row's Gram product on all cores saved a millisecond, but its other rounding moved a
    // marginal pole's stability and lost the weak member of a split pair on one simulated set.)
    let mut gsum = DMatrix::<f64>::zeros(np, np);
    let mut reduced: Vec<(usize, DMatrix<f64>)> = Vec::new();
    for p in 0..np {
        for (_, x) in &factors {
            let row = x.row(p);
            gsum.ger(1.0, &row.transpose(), &row.transpose(), 1.0);
        }
        if p == 0 || p + 1 < first_order {
            continue;
        }
        let m = (tsum.view((0, 0), (p + 1, p + 1)) - gsum.view((0, 0), (p + 1, p + 1))) * 2.0;
        reduced.push((p, m));
    }
    // Each order's poles are independent of the others': solved on all cores, then classified
    // against the order below in turn.
    // An order's roots cost ~p² per sweep: the highest orders go first.
    let found = crate::numeric::par_map_dearest_first(
        &reduced,
        |(p, _)| *p as f64,
        |(p, m)| poles_of_order(*p, m, &factors, dt, [f_lo, f_hi]),
    );
    let mut out = Stabilization {
        poles: Vec::new(),
        max_order,
    };
    let mut prev: Vec<Pole> = Vec::new();
    for ((p, _), here) in reduced.iter().zip(found) {
        // A singular order is skipped: the next is classified against the last one solved.
        let Some(mut here) = here else {
            continue;
        };
        for pole in &mut here {
            pole.status = classify(pole, &prev, criteria);
        }
        if *p >= first_order {
            out.poles.extend(here.iter().cloned());
        }
        prev = here;
    }
    Ok(out)
}

/// Lines per block of the sums over lines: a block's powers and data stay in cache.
const LINE_BLOCK: usize = 512;

/// The sums over lines behind every output's normal equations, for d < np: Σ_k Re z_k^d·c_k for
/// the columns c = W², W²·Re H, W²|H|² of each output (3 per output, first matrix), and
/// Σ_k Im z_k^d·W²·Im H (one per output, second). Formed as matrix products block by block, the
/// blocks spread over the cores.
fn line_sums(
    z: &[Complex64],
    h: &[Vec<Complex64>],
    weight: &[Vec<f64>],
    np: usize,
) -> (DMatrix<f64>, DMatrix<f64>) {
    let no = h.len();
    let ranges = crate::numeric::core_ranges(z.len(), LINE_BLOCK);
    let parts = crate::numeric::par_map(&ranges, |&(r0, r1)| {
        let mut re_sums = DMatrix::<f64>::zeros(np, 3 * no);
        let mut im_sums = DMatrix::<f64>::zeros(np, no);
        let mut re_pow = DMatrix::<f64>::zeros(np, LINE_BLOCK);
        let mut im_pow = DMatrix::<f64>::zeros(np, LINE_BLOCK);
        let mut re_data = DMatrix::<f64>::zeros(LINE_BLOCK, 3 * no);
        let mut im_data = DMatrix::<f64>::zeros(LINE_BLOCK, no);
        for k0 in (r0..r1).step_by(LINE_BLOCK) {
            let kb = (r1 - k0).min(LINE_BLOCK);
            for k in 0..kb {
                let zk = z[k0 + k];
                let mut zp = Complex64::new(1.0, 0.0);
                for d in 0..np {
                    re_pow[(d, k)] = zp.re;
                    im_pow[(d, k)] = zp.im;
                    zp *= zk;
                }
            }
            for o in 0..no {
                for k in 0..kb {
                    let w2 = weight[o][k0 + k] * weight[o][k0 + k];
                    let hk = h[o][k0 + k];
                    re_data[(k, 3 * o)] = w2;
                    re_data[(k, 3 * o + 1)] = w2 * hk.re;
                    re_data[(k, 3 * o + 2)] = w2 * hk.norm_sqr();
                    im_data[(k, o)] = w2 * hk.im;
                }
            }
            re_sums.gemm(1.0, &re_pow.columns(0, kb), &re_data.rows(0, kb), 1.0);
            im_sums.gemm(1.0, &im_pow.columns(0, kb), &im_data.rows(0, kb), 1.0);
        }
        (re_sums, im_sums)
    });
    parts
        .into_iter()
        .reduce(|(a, b), (c, d)| (a + c, b + d))
        .unwrap_or_else(|| (DMatrix::zeros(np, 3 * no), DMatrix::zeros(np, no)))
}

/// The roots of z^p + α_{p−1} z^{p−1} + … + α_0 (`alpha` from α_0 up): by the Aberth
/// iteration, or, should that not settle, as the eigenvalues of the Frobenius companion matrix.
fn denominator_roots(alpha: &[f64]) -> Option<Vec<Complex64>> {
    if let Some(r) = crate::numeric::polynomial_roots(alpha) {
        return Some(r);
    }
    let p = alpha.len();
    let mut comp = DMatrix::<f64>::zeros(p, p);
    for j in 0..p {
        comp[(0, j)] = -alpha[p - 1 - j];
    }
    for j in 1..p {
        comp[(j, j - 1)] = 1.0;
    }
    crate::numeric::complex_eigenvalues(comp)
}

/// The poles of model order `p` from its reduced normal matrix `m` ((p+1)², of T − SᵀR⁻¹S),
/// unclassified: the denominator's roots inside the unit circle, in `band` (Hz), with their
/// shapes from every output's numerator. `None` when the order's system is singular.
fn poles_of_order(
    p: usize,
    m: &DMatrix<f64>,
    factors: &[(DMatrix<f64>, DMatrix<f64>)],
    dt: f64,
    [f_lo, f_hi]: [f64; 2],
) -> Option<Vec<Pole>> {
    let a11 = m.view((0, 0), (p, p)).into_owned();
    let a12 = m.view((0, p), (p, 1)).into_owned();
    let sol = a11.lu().solve(&(-a12))?;
    let mut alpha = DVector::<f64>::zeros(p + 1);
    alpha.rows_mut(0, p).copy_from(&sol.column(0));
    alpha[p] = 1.0;
    let roots = denominator_roots(&alpha.as_slice()[..p])?;
    // β_o = −R_o⁻¹S_oα = −L⁻ᵀ(X_o α) on the leading blocks.
    let betas: Vec<DVector<f64>> = factors
        .iter()
        .map(|(l, x)| {
            let y = x.view((0, 0), (p + 1, p + 1)) * &alpha;
            l.view((0, 0), (p + 1, p + 1))
                .tr_solve_lower_triangular(&(-y))
                .unwrap_or_else(|| DVector::zeros(p + 1))
        })
        .collect();
    // The roots that are poles in the band, then every output's numerator at each of them at
    // once: the roots' powers times the numerators' coefficients, as two matrix products.
    let kept: Vec<(Complex64, Complex64)> = roots
        .iter()
        .map(|zr| Complex64::new(zr.re, zr.im))
        .filter(|zr| zr.im > 0.0 && zr.norm() < 1.0)
        .map(|zr| (zr, zr.ln() / dt))
        .filter(|(_, lam)| {
            let f = lam.norm() / TAU;
            f >= f_lo && f <= f_hi
        })
        .collect();
    let coef = DMatrix::from_fn(p + 1, betas.len(), |r, o| betas[o][r]);
    let mut pow_re = DMatrix::<f64>::zeros(kept.len(), p + 1);
    let mut pow_im = DMatrix::<f64>::zeros(kept.len(), p + 1);
    for (i, (zr, _)) in kept.iter().enumerate() {
        let mut zp = Complex64::new(1.0, 0.0);
        for r in 0..=p {
            pow_re[(i, r)] = zp.re;
            pow_im[(i, r)] = zp.im;
            zp *= zr;
        }
    }
    let (num_re, num_im) = (&pow_re * &coef, &pow_im * &coef);
    let mut here: Vec<Pole> = kept
        .iter()
        .enumerate()
        .map(|(i, &(_, lam))| {
            let shape: Vec<Complex64> = (0..betas.len())
                .map(|o| Complex64::new(num_re[(i, o)], num_im[(i, o)]))
                .collect();
            Pole {
                order: p,
                lambda: lam,
                frequency_hz: lam.norm() / TAU,
                damping_ratio: -lam.re / lam.norm(),
                status: PoleStatus::New,
                mpc: mpc(&shape),
                shape,
            }
        })
        .collect();
    here.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    Some(here)
}

fn classify(p: &Pole, prev: &[Pole], c: StabilityCriteria) -> PoleStatus {
    let Some(q) = prev.iter().min_by(|a, b| {
        (a.frequency_hz - p.frequency_hz)
            .abs()
            .total_cmp(&(b.frequency_hz - p.frequency_hz).abs())
    }) else {
        return PoleStatus::New;
    };
    if (q.frequency_hz - p.frequency_hz).abs() > c.frequency * p.frequency_hz {
        return PoleStatus::New;
    }
    if (q.damping_ratio - p.damping_ratio).abs() > c.damping * p.damping_ratio.abs() {
        return PoleStatus::Frequency;
    }
    if mac(&q.shape, &p.shape) < c.mac {
        return PoleStatus::FrequencyDamping;
    }
    PoleStatus::FrequencyDampingShape
}

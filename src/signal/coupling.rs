//! The audio interface's AC coupling, found from the hammer channel and undone in the FRF.
//!
//! Every input of an audio interface is high-passed (a first-order corner of a few Hz). The
//! hammer's pulse comes out with a slow negative tail, which the force window cuts, while the
//! response keeps its share of the high-pass: the measured FRF is HP(s')·H(s') with
//! s' = jω + 1/τ after the exponential window — an error of +5.7° at ten times the corner (first-order
//! high-pass, derived). Past the pulse the hammer channel is y = c + K·e^{−ω_c t} plus hum, so the corner
//! can be read off it; dividing the FRF by HP(s') then removes the error exactly.

use nalgebra::{DMatrix, DVector};

use super::carryover::PulseSpan;
use crate::Complex64;

const TAU: f64 = 2.0 * std::f64::consts::PI;

/// Corner (Hz) from the tail after one pulse, by variable projection: for each trial ω_c the rest
/// (offset, amplitude, sine/cosine terms at the 50 and 60 Hz harmonics) is linear least squares.
/// `None` when no clear tail stands above the noise (a DC-coupled input, or an unexplained
/// signal), or the best corner lies at the edge of the 0.3–30 Hz search.
pub fn corner_from_tail(
    a: &[f64],
    sp: &PulseSpan,
    limit: usize,
    fs: u32,
    sign: f64,
) -> Option<f64> {
    let dt = 1.0 / fs as f64;
    let width = (sp.end - sp.start).max(1);
    let base_n = (0.01 * fs as f64) as usize;
    let b0 = sp.start.checked_sub(base_n + width)?;
    let base = a[b0..b0 + base_n].iter().sum::<f64>() / base_n as f64;
    let t1 = sp.end + 2 * width;
    // Long enough that a slow tail (1 Hz: τ = 0.16 s) is not mistaken for an offset; never into
    // the next pulse.
    let t2 = (t1 + (0.6 * fs as f64) as usize).min(limit).min(a.len());
    if t2 < t1 + 64 {
        return None;
    }
    // 1 kHz is plenty: the tail is slow and the hum terms reach only 180 Hz.
    let step = ((fs as usize) / 1000).max(1);
    let ys: Vec<f64> = (t1..t2)
        .step_by(step)
        .map(|i| sign * (a[i] - base))
        .collect();
    let hum_hz = [50.0, 100.0, 150.0, 60.0, 120.0, 180.0];
    let cols = 2 + 2 * hum_hz.len();
    let nfix = cols - 1;
    let h = step as f64 * dt;
    // Rows of the fixed part, [1, sin, cos of each hum line] at t_k = k·h; the phasors advance
    // by one rotation per row (600 rows: the drift is ~1e-13).
    let steps: Vec<Complex64> = hum_hz
        .iter()
        .map(|f| Complex64::from_polar(1.0, TAU * f * h))
        .collect();
    let mut phasors = vec![Complex64::new(1.0, 0.0); hum_hz.len()];
    let yy: f64 = ys.iter().map(|y| y * y).sum();
    // Products of the fixed columns do not depend on the trial corner: formed once, as one
    // matrix product.
    let mut fixed = DMatrix::<f64>::zeros(ys.len(), nfix);
    for k in 0..ys.len() {
        fixed[(k, 0)] = 1.0;
        for (j, (p, z)) in phasors.iter_mut().zip(&steps).enumerate() {
            fixed[(k, 1 + 2 * j)] = p.im;
            fixed[(k, 2 + 2 * j)] = p.re;
            *p *= z;
        }
    }
    let fixed_t = fixed.transpose();
    let gff = &fixed_t * &fixed;
    let gfy = &fixed_t * DVector::from_column_slice(&ys);
    let n_rows = ys.len();
    // Σ_{k<n} z^k in closed form; |z| < 1 here (a decaying trial exponential).
    let geometric = |z: Complex64| (Complex64::new(1.0, 0.0) - z.powu(n_rows as u32)) / (1.0 - z);
    // (residual energy, exponential amplitude K) of the best linear fit for a trial corner.
    // The exponential's products with the constant and the hum columns are geometric sums, so a
    // trial costs one pass over the data (for its product with y) instead of one per column.
    let fit = |fc: f64| -> (f64, f64) {
        let q = (-TAU * fc * h).exp();
        let mut ata = DMatrix::<f64>::zeros(cols, cols);
        let mut aty = DVector::<f64>::zeros(cols);
        ata.view_mut((1, 1), (nfix, nfix)).copy_from(&gff);
        aty.rows_mut(1, nfix).copy_from(&gfy);
        ata[(0, 0)] = geometric(Complex64::new(q * q, 0.0)).re;
        ata[(0, 1)] = geometric(Complex64::new(q, 0.0)).re;
        for (j, f) in hum_hz.iter().enumerate() {
            let s = geometric(Complex64::from_polar(q, TAU * f * h));
            ata[(0, 2 + 2 * j)] = s.im;
            ata[(0, 3 + 2 * j)] = s.re;
        }
        // Σ q^k·y_k in four interleaved chains (stride q⁴), which run side by side.
        let q4 = (q * q) * (q * q);
        let mut e = [1.0, q, q * q, q * q * q];
        let mut acc = [0.0f64; 4];
        let (quads, rest) = ys.as_chunks::<4>();
        for c in quads {
            for j in 0..4 {
                acc[j] += e[j] * c[j];
                e[j] *= q4;
            }
        }
        let mut ey = acc.iter().sum::<f64>();
        let mut e0 = e[0];
        for &y in rest {
            ey += e0 * y;
            e0 *= q;
        }
        aty[0] = ey;
        for c in 1..cols {
            ata[(c, 0)] = ata[(0, c)];
        }
        match ata.cholesky() {
            Some(ch) => {
                let x = ch.solve(&aty);
                (yy - aty.dot(&x), x[0])
            }
            None => (f64::INFINITY, 0.0),
        }
    };
    let grid: Vec<f64> = (0..=24)
        .map(|i| 0.3 * 100f64.powf(i as f64 / 24.0))
        .collect();
    let (ib, _) =
        grid.iter()
            .map(|&f| fit(f).0)
            .enumerate()
            .fold(
                (0, f64::INFINITY),
                |acc, (i, r)| if r < acc.1 { (i, r) } else { acc },
            );
    if ib == 0 || ib == grid.len() - 1 {
        return None;
    }
    let (mut lo, mut hi) = (grid[ib - 1].ln(), grid[ib + 1].ln());
    let g = 0.5 * (5f64.sqrt() - 1.0);
    let (mut x1, mut x2) = (hi - g * (hi - lo), lo + g * (hi - lo));
    let (mut f1, mut f2) = (fit(x1.exp()).0, fit(x2.exp()).0);
    for _ in 0..16 {
        if f1 < f2 {
            hi = x2;
            x2 = x1;
            f2 = f1;
            x1 = hi - g * (hi - lo);
            f1 = fit(x1.exp()).0;
        } else {
            lo = x1;
            x1 = x2;
            f1 = f2;
            x2 = lo + g * (hi - lo);
            f2 = fit(x2.exp()).0;
        }
    }
    let fc = (0.5 * (lo + hi)).exp();
    let (res, k) = fit(fc);
    // A real tail is negative after a positive pulse and stands well clear of what is left.
    let rms = (res.max(0.0) / ys.len() as f64).sqrt();
    (k < 0.0 && -k > 10.0 * rms).then_some(fc)
}

/// The station's corner: the median over up to `max_hits` pulses that show a tail.
pub fn station_corner_hz(
    a: &[f64],
    spans: &[PulseSpan],
    fs: u32,
    sign: f64,
    max_hits: usize,
) -> Option<f64> {
    let mut v: Vec<f64> = spans
        .iter()
        .enumerate()
        .filter_map(|(i, sp)| {
            let limit = spans
                .get(i + 1)
                .map_or(a.len(), |n| n.start.saturating_sub(n.end - n.start));
            corner_from_tail(a, sp, limit, fs, sign)
        })
        .take(max_hits)
        .collect();
    if v.is_empty() {
        return None;
    }
    let m = v.len() / 2;
    Some(*v.select_nth_unstable_by(m, f64::total_cmp).1)
}

/// Per-line factors 1/HP(s') = (s' + ω_c)/s', s' = jω + 1/τ, that undo the coupling in an FRF.
pub fn inverse_factors(freq_hz: &[f64], corner_hz: f64, exp_tau_s: f64) -> Vec<Complex64> {
    let inv_tau = if exp_tau_s.is_finite() {
        1.0 / exp_tau_s
    } else {
        0.0
    };
    freq_hz
        .iter()
        .map(|f| {
            let sp = Complex64::new(inv_tau, TAU * f);
            (sp + TAU * corner_hz) / sp
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::signal::hits::{find_pulse, find_triggers};
    use crate::sim::{Impact, ModalModel, Pickup, Rig, Rng, TruthMode, synthesize};

    #[test]
    fn corner_from_a_simulated_hammer_tail() {
        // A half-sine through a first-order high-pass grows a negative tail lasting ≈ 1/(2πf_c)
        // (derived); the simulated corner is 4 Hz. DC-coupled input: no corner.
        let model = ModalModel {
            modes: vec![TruthMode {
                frequency_hz: 300.0,
                damping_ratio: 0.01,
                shape: vec![1.0],
            }],
        };
        for (ac, hum, noise) in [
            (Some(4.0), 0.0, 0.0),
            (Some(4.0), 2e-4, 3e-5),
            (Some(1.5), 2e-4, 3e-5),
            (None, 2e-4, 3e-5),
        ] {
            let rig = Rig {
                sample_rate_hz: 48000,
                ac_corner_hz: ac,
                hum_volts: hum,
                noise_volts: [noise, noise],
                ..Rig::default()
            };
            let imp = [Impact {
                time_s: 0.5,
                peak_n: 150.0,
                duration_s: 2.5e-4,
                second: None,
            }];
            let (a, _) = synthesize(
                &model,
                Pickup::ForceAndResponse { response: 0 },
                0,
                &imp,
                1.5,
                &rig,
                &mut Rng::new(1),
            );
            let t = find_triggers(&a, 0.02, crate::setup::Slope::Rising, 10000)[0];
            let p = find_pulse(&a, t, 1.0, 960);
            let sp = PulseSpan {
                trigger: t,
                start: p.start,
                end: p.end + 1,
            };
            let fc = corner_from_tail(&a, &sp, a.len(), 48000, 1.0);
            match ac {
                Some(want) => {
                    let fc = fc.expect("a tail");
                    assert!((fc / want - 1.0).abs() < 0.02, "{ac:?}, hum {hum}: {fc}");
                }
                None => assert!(fc.is_none(), "DC-coupled: {fc:?}"),
            }
        }
    }
}

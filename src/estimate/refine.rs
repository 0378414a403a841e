//! Local refinement of fitted poles: each pole is moved (σ, ω_d) to minimise the residual of the
//! LSFD fit over a narrow band around it, all stations together, the other poles held fixed;
//! poles within each other's band are moved together.
//!
//! Why: the global LSCF minimises a linearised error over the whole band; for a very lightly
//! damped mode whose peak spans a few lines that linearisation, and the thousands of lines far from
//! the peak, bias the damping by tens of per cent once the exponential window's share is removed.
//! The local fit minimises the true FRF error where the mode lives (a nonlinear least squares over
//! two parameters per pole, by Nelder–Mead).

use super::lsfd::LocalBand;
use crate::Complex64;

const TAU: f64 = 2.0 * std::f64::consts::PI;

/// Refines `lambda` (measured poles, rad/s) in place. `weight` are per-station, per-line weights
/// for the local fit. Poles whose local band holds too few lines are left as they are.
pub fn refine_poles(
    freq_hz: &[f64],
    h: &[Vec<Complex64>],
    weight: &[Vec<f64>],
    lambda: &mut [Complex64],
    exp_tau_s: f64,
) {
    // Poles within each other's local band (a close pair from two bending planes) are one
    // cluster and are refined together, all their σ and ω_d at once: refined one at a time, each
    // against the other's last value, a pair at Δf/B ≈ 2 still moved by 3e-5 of |λ| (a per cent
    // of its damping) after eight sweeps. Clusters are independent and spread over the cores.
    let current = lambda.to_vec();
    let clusters = clusters(&current);
    let updates: Vec<Vec<(usize, Complex64)>> = crate::numeric::par_map_dearest_first(
        &clusters,
        // The cost grows with the band (∝ frequency) and steeply with the cluster's size.
        |c| current[c[0]].norm() * (c.len() * c.len()) as f64,
        |c| refine_cluster(freq_hz, h, weight, &current, c, exp_tau_s),
    );
    for (r, l) in updates.into_iter().flatten() {
        lambda[r] = l;
    }
}

/// The poles grouped by the neighbour relation (connected components), each group by frequency.
fn clusters(lambda: &[Complex64]) -> Vec<Vec<usize>> {
    let mut group: Vec<Option<usize>> = vec![None; lambda.len()];
    let mut out: Vec<Vec<usize>> = Vec::new();
    for r in 0..lambda.len() {
        if group[r].is_some() {
            continue;
        }
        let g = out.len();
        let mut members = vec![r];
        group[r] = Some(g);
        let mut i = 0;
        while i < members.len() {
            for q in neighbours(lambda, members[i]) {
                if group[q].is_none() {
                    group[q] = Some(g);
                    members.push(q);
                }
            }
            i += 1;
        }
        members.sort_by(|&a, &b| lambda[a].im.total_cmp(&lambda[b].im));
        out.push(members);
    }
    out
}

fn half_band_hz(l: Complex64) -> f64 {
    let f = l.im / TAU;
    (0.03 * f).max(10.0 * -l.re / TAU)
}

fn neighbours(lambda: &[Complex64], r: usize) -> Vec<usize> {
    let f = lambda[r].im / TAU;
    let half = half_band_hz(lambda[r]);
    (0..lambda.len())
        .filter(|&q| q != r && (lambda[q].im / TAU - f).abs() < 2.0 * half)
        .collect()
}

/// The most poles refined together; a larger cluster (a dense stretch of modes) keeps its poles.
const MAX_CLUSTER: usize = 4;

/// Refines the poles `members` (one cluster) together: (ln σ, ω_d) of each by Nelder–Mead on
/// the residual of the LSFD over the band around them, with the other poles in that band held
/// fixed. Returns the accepted updates.
fn refine_cluster(
    freq_hz: &[f64],
    h: &[Vec<Complex64>],
    weight: &[Vec<f64>],
    lambda: &[Complex64],
    members: &[usize],
    exp_tau_s: f64,
) -> Vec<(usize, Complex64)> {
    if members.len() > MAX_CLUSTER {
        return Vec::new();
    }
    let lo_hz = members
        .iter()
        .map(|&r| lambda[r].im / TAU - half_band_hz(lambda[r]))
        .fold(f64::INFINITY, f64::min);
    let hi_hz = members
        .iter()
        .map(|&r| lambda[r].im / TAU + half_band_hz(lambda[r]))
        .fold(f64::NEG_INFINITY, f64::max);
    let lo = freq_hz.partition_point(|&x| x < lo_hz);
    let hi = freq_hz.partition_point(|&x| x <= hi_hz);
    if hi < lo + 12 * members.len() {
        return Vec::new();
    }
    // Only these poles and their neighbours enter the local model; the residual terms stand for
    // every mode farther away.
    let mut fixed: Vec<usize> = members
        .iter()
        .flat_map(|&r| neighbours(lambda, r))
        .filter(|q| !members.contains(q))
        .collect();
    fixed.sort_unstable();
    fixed.dedup();
    // One weight per line shared by the stations (their mean) and one scale per station (its
    // mean weight there), so every station reuses one factorised normal matrix.
    let line_w: Vec<f64> = (0..freq_hz.len())
        .map(|k| {
            if k < lo || k >= hi {
                0.0
            } else {
                weight.iter().map(|w| w[k]).sum::<f64>() / weight.len().max(1) as f64
            }
        })
        .collect();
    let m = line_w[lo..hi].iter().sum::<f64>();
    let out_scale: Vec<f64> = weight
        .iter()
        .map(|w| {
            let o = w[lo..hi].iter().sum::<f64>();
            if m > 0.0 { o / m } else { 1.0 }
        })
        .collect();
    let band = LocalBand::new(freq_hz, h, lo..hi, &line_w, &out_scale);
    let objective = |x: &[f64]| -> f64 {
        let mut poles: Vec<Complex64> = fixed.iter().map(|&q| lambda[q]).collect();
        poles.extend(x.chunks_exact(2).map(|p| Complex64::new(-p[0].exp(), p[1])));
        band.residual(&poles, exp_tau_s).unwrap_or(f64::INFINITY)
    };
    let (mut start, mut step, mut tol) = (Vec::new(), Vec::new(), Vec::new());
    for &r in members {
        let sigma = -lambda[r].re;
        start.extend([sigma.max(1e-6).ln(), lambda[r].im]);
        step.extend([0.3, 0.2 * sigma.max(0.05 * TAU)]);
        // Settled when the damping is to 1e-7 of itself (ln σ) and the frequency to 1e-10: far
        // inside what any test resolves.
        tol.extend([1e-7, 1e-10 * lambda[r].im.abs()]);
    }
    let iters = 40 * members.len() * members.len();
    let Some(x) = nelder_mead_n(objective, &start, &step, iters, &tol) else {
        return Vec::new();
    };
    // A local fit that wanders (frequency off by more than 1 %, damping changed by more than a
    // factor of 4, or no longer a resonance) found something else than this pole: keep the pole.
    members
        .iter()
        .zip(x.chunks_exact(2))
        .filter_map(|(&r, p)| {
            let (sigma, s_new, wd) = (-lambda[r].re, p[0].exp(), p[1]);
            let plausible = (wd / lambda[r].im - 1.0).abs() < 0.01
                && s_new < 4.0 * sigma.max(1e-9)
                && s_new > 0.25 * sigma
                && s_new < 0.5 * wd.abs();
            plausible.then(|| (r, Complex64::new(-s_new, wd)))
        })
        .collect()
}

/// Nelder–Mead in `x0.len()` dimensions (standard coefficients: reflection 1, expansion 2,
/// contraction ½, shrink ½; Nelder & Mead 1965): at most `iters` steps, fewer once every vertex
/// lies within `tol` (per coordinate) of the best. `None` when the start is not finite.
pub(crate) fn nelder_mead_n(
    f: impl Fn(&[f64]) -> f64,
    x0: &[f64],
    step: &[f64],
    iters: usize,
    tol: &[f64],
) -> Option<Vec<f64>> {
    let n = x0.len();
    let mut pts: Vec<Vec<f64>> = vec![x0.to_vec()];
    for i in 0..n {
        let mut p = x0.to_vec();
        p[i] += step[i];
        pts.push(p);
    }
    let mut val: Vec<f64> = pts.iter().map(|p| f(p)).collect();
    if !val.iter().all(|v| v.is_finite()) {
        return None;
    }
    let mut idx: Vec<usize> = (0..=n).collect();
    for _ in 0..iters {
        idx.sort_by(|&a, &b| val[a].total_cmp(&val[b]));
        let (b, w, sw) = (idx[0], idx[n], idx[n - 1]);
        if idx[1..]
            .iter()
            .all(|&i| (0..n).all(|d| (pts[i][d] - pts[b][d]).abs() <= tol[d]))
        {
            break;
        }
        let c: Vec<f64> = (0..n)
            .map(|d| idx[..n].iter().map(|&i| pts[i][d]).sum::<f64>() / n as f64)
            .collect();
        let at = |t: f64| -> Vec<f64> { (0..n).map(|d| c[d] + t * (pts[w][d] - c[d])).collect() };
        let xr = at(-1.0);
        let fr = f(&xr);
        if fr < val[b] {
            let xe = at(-2.0);
            let fe = f(&xe);
            if fe < fr {
                (pts[w], val[w]) = (xe, fe);
            } else {
                (pts[w], val[w]) = (xr, fr);
            }
        } else if fr < val[sw] {
            (pts[w], val[w]) = (xr, fr);
        } else {
            let xc = at(0.5);
            let fc = f(&xc);
            if fc < val[w] {
                (pts[w], val[w]) = (xc, fc);
            } else {
                let best = pts[b].clone();
                for &i in &idx[1..] {
                    for d in 0..n {
                        pts[i][d] = 0.5 * (pts[i][d] + best[d]);
                    }
                    val[i] = f(&pts[i]);
                }
            }
        }
    }
    let best = (0..=n).min_by(|&a, &b| val[a].total_cmp(&val[b]))?;
    Some(pts[best].clone())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rosenbrock's function in four dimensions, Σ 100(x_{i+1} − x_i²)² + (1 − x_i)², has its
    /// minimum 0 at (1, 1, 1, 1) (Rosenbrock 1960; the usual test of a simplex method).
    #[test]
    fn simplex_finds_the_rosenbrock_minimum_in_four_dimensions() {
        let rosen = |x: &[f64]| {
            x.windows(2)
                .map(|w| 100.0 * (w[1] - w[0] * w[0]).powi(2) + (1.0 - w[0]).powi(2))
                .sum::<f64>()
        };
        let x = nelder_mead_n(
            rosen,
            &[-1.2, 1.0, -0.5, 0.8],
            &[0.5; 4],
            20_000,
            &[1e-10; 4],
        )
        .unwrap();
        for v in &x {
            assert!((v - 1.0).abs() < 1e-4, "{x:?}");
        }
        // A non-finite start is refused.
        assert!(nelder_mead_n(|_| f64::NAN, &[0.0, 0.0], &[1.0, 1.0], 10, &[0.0; 2]).is_none());
    }

    /// A quadratic bowl's minimum (derived: ∇f = 0 at (0.3, −0.7) when the cross term is
    /// absent) is found to the tolerance asked, well before the step limit.
    #[test]
    fn simplex_stops_at_its_tolerance() {
        let f = |x: &[f64]| (x[0] - 0.3).powi(2) + 5.0 * (x[1] + 0.7).powi(2);
        let x = nelder_mead_n(f, &[1.0, 1.0], &[0.2, 0.3], 10_000, &[1e-9; 2]).unwrap();
        assert!(
            (x[0] - 0.3).abs() < 1e-8 && (x[1] + 0.7).abs() < 1e-8,
            "{x:?}"
        );
    }

    #[test]
    fn neighbours_form_clusters() {
        // Two poles 1 % apart (each other's band is ±3 %) and one far above: two clusters.
        let l = |f: f64| Complex64::new(-0.002 * TAU * f, TAU * f);
        let poles = [l(300.0), l(1000.0), l(303.0)];
        assert_eq!(clusters(&poles), vec![vec![0, 2], vec![1]]);
    }
}

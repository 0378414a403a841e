//! Local refinement of fitted poles: each pole is moved (σ, ω_d) to minimise the residual of the
//! LSFD fit over a narrow band around it, all stations together, the other poles held fixed.
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
    // Poles with a neighbour in their local band are refined again until the sweeps stop moving
    // them (each sees the other's update; a close pair needs several), at most eight sweeps;
    // isolated poles converge in one pass. Within a pass the poles are independent (each sees the
    // others as they were), so they are spread over the cores.
    for sweep in 0..8 {
        let current = lambda.to_vec();
        let todo: Vec<usize> = (0..current.len())
            .filter(|&r| sweep == 0 || !neighbours(&current, r).is_empty())
            .collect();
        if todo.is_empty() {
            break;
        }
        // A pole's local band, and its cost, grows with its frequency.
        let updates: Vec<(usize, Complex64)> = crate::numeric::par_map_dearest_first(
            &todo,
            |&r| current[r].norm(),
            |&r| refine_one(freq_hz, h, weight, &current, r, exp_tau_s).map(|l| (r, l)),
        )
        .into_iter()
        .flatten()
        .collect();
        let mut moved = 0.0f64;
        for (r, l) in updates {
            moved = moved.max((l - lambda[r]).norm() / lambda[r].norm().max(f64::MIN_POSITIVE));
            lambda[r] = l;
        }
        if sweep > 0 && moved < 1e-7 {
            break;
        }
    }
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

fn refine_one(
    freq_hz: &[f64],
    h: &[Vec<Complex64>],
    weight: &[Vec<f64>],
    lambda: &[Complex64],
    r: usize,
    exp_tau_s: f64,
) -> Option<Complex64> {
    let f = lambda[r].im / TAU;
    let sigma = -lambda[r].re;
    let half = half_band_hz(lambda[r]);
    let lo = freq_hz.partition_point(|&x| x < f - half);
    let hi = freq_hz.partition_point(|&x| x <= f + half);
    if hi < lo + 12 {
        return None;
    }
    // Only this pole and its neighbours enter the local model; the residual terms stand for
    // every mode farther away.
    let near = neighbours(lambda, r);
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
    let objective = |ls: f64, wd: f64| -> f64 {
        let mut poles: Vec<Complex64> = near.iter().map(|&q| lambda[q]).collect();
        poles.push(Complex64::new(-ls.exp(), wd));
        band.residual(&poles, exp_tau_s).unwrap_or(f64::INFINITY)
    };
    let start = [sigma.max(1e-6).ln(), lambda[r].im];
    let step = [0.3, 0.2 * sigma.max(0.05 * TAU)];
    // Converged when the damping is settled to 1e-7 of itself (ln σ) and the frequency to 1e-10:
    // far inside what any test resolves, and most poles get there well before 40 steps.
    let tol = [1e-7, 1e-10 * lambda[r].im.abs()];
    let [ls, wd] = nelder_mead(objective, start, step, 40, tol)?;
    // A local fit that wanders (frequency off by more than 1 %, damping changed by more than a
    // factor of 4, or no longer a resonance) found something else than this pole: keep the pole.
    let s_new = ls.exp();
    let plausible = (wd / lambda[r].im - 1.0).abs() < 0.01
        && s_new < 4.0 * sigma.max(1e-9)
        && s_new > 0.25 * sigma
        && s_new < 0.5 * wd.abs();
    plausible.then(|| Complex64::new(-s_new, wd))
}

/// A small Nelder–Mead simplex minimiser in two dimensions: at most `iters` steps, fewer once
/// every vertex lies within `tol` (per coordinate) of the best.
pub(crate) fn nelder_mead(
    f: impl Fn(f64, f64) -> f64,
    x0: [f64; 2],
    step: [f64; 2],
    iters: usize,
    tol: [f64; 2],
) -> Option<[f64; 2]> {
    let mut pts = [x0, [x0[0] + step[0], x0[1]], [x0[0], x0[1] + step[1]]];
    let mut val = pts.map(|p| f(p[0], p[1]));
    if !val.iter().all(|v| v.is_finite()) {
        return None;
    }
    for _ in 0..iters {
        let mut idx = [0usize, 1, 2];
        idx.sort_by(|&a, &b| val[a].total_cmp(&val[b]));
        let (b, m, w) = (idx[0], idx[1], idx[2]);
        if [m, w].iter().all(|&i| {
            (pts[i][0] - pts[b][0]).abs() <= tol[0] && (pts[i][1] - pts[b][1]).abs() <= tol[1]
        }) {
            break;
        }
        let c = [(pts[b][0] + pts[m][0]) / 2.0, (pts[b][1] + pts[m][1]) / 2.0];
        let at = |t: f64| [c[0] + t * (pts[w][0] - c[0]), c[1] + t * (pts[w][1] - c[1])];
        let xr = at(-1.0);
        let fr = f(xr[0], xr[1]);
        if fr < val[b] {
            let xe = at(-2.0);
            let fe = f(xe[0], xe[1]);
            if fe < fr {
                pts[w] = xe;
                val[w] = fe;
            } else {
                pts[w] = xr;
                val[w] = fr;
            }
        } else if fr < val[m] {
            pts[w] = xr;
            val[w] = fr;
        } else {
            let xc = at(0.5);
            let fc = f(xc[0], xc[1]);
            if fc < val[w] {
                pts[w] = xc;
                val[w] = fc;
            } else {
                for i in [m, w] {
                    pts[i] = [(pts[i][0] + pts[b][0]) / 2.0, (pts[i][1] + pts[b][1]) / 2.0];
                    val[i] = f(pts[i][0], pts[i][1]);
                }
            }
        }
    }
    let best = (0..3).min_by(|&a, &b| val[a].total_cmp(&val[b]))?;
    Some(pts[best])
}

//! Small numeric helpers, and guarded dense linear algebra: every iterative decomposition here is bounded and refuses
//! non-finite input.
//!
//! nalgebra's SVD, Schur and symmetric eigen solvers iterate until convergence by default; on a
//! matrix holding NaN or ±∞ they never converge and the caller hangs. Every decomposition in the
//! crate's numerics goes through these wrappers, which check the input and cap the iterations,
//! so a poisoned record costs one station or one mode, never the whole test.

use nalgebra::{DMatrix, DVector, SVD, Schur, SymmetricEigen};

use crate::Complex64;

mod roots;
pub use roots::polynomial_roots;

/// Iterations allowed per row of the matrix: QR-type sweeps need a few per eigenvalue.
const SWEEPS_PER_ROW: usize = 60;

std::thread_local! {
    static PARALLEL_WORKER: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
}

/// Runs `f` as one worker of a parallel section: [`par_map`] called inside runs inline.
pub fn as_parallel_worker<R>(f: impl FnOnce() -> R) -> R {
    let was = PARALLEL_WORKER.with(|w| w.replace(true));
    let r = f();
    PARALLEL_WORKER.with(|w| w.set(was));
    r
}

/// Whether this thread is a worker of a parallel section.
pub fn in_parallel_section() -> bool {
    PARALLEL_WORKER.with(|w| w.get())
}

/// `0..n` cut into contiguous ranges, one per core, each at least `min_len` long (fewer when
/// `n` is short): the shares of a sum that [`par_map`] spreads over the cores.
pub fn core_ranges(n: usize, min_len: usize) -> Vec<(usize, usize)> {
    let workers = std::thread::available_parallelism().map_or(1, |n| n.get());
    let per = n.div_ceil(workers).max(min_len).max(1);
    (0..n)
        .step_by(per)
        .map(|k0| (k0, (k0 + per).min(n)))
        .collect()
}

/// `f` of every item, in order, spread over the machine's cores (each thread takes the next
/// item as it finishes one, so uneven items balance). Runs inline for a single item or core.
pub fn par_map<T: Sync, R: Send>(items: &[T], f: impl Fn(&T) -> R + Sync) -> Vec<R> {
    use std::sync::atomic::{AtomicUsize, Ordering};
    let workers = std::thread::available_parallelism()
        .map_or(1, |n| n.get())
        .min(items.len());
    // Inside a parallel section every core is already busy: more threads would only cost their
    // start-up and the switching between them.
    if workers < 2 || in_parallel_section() {
        return items.iter().map(f).collect();
    }
    let next = AtomicUsize::new(0);
    let (next, f) = (&next, &f);
    let mut done: Vec<(usize, R)> = std::thread::scope(|scope| {
        let handles: Vec<_> = (0..workers)
            .map(|_| {
                scope.spawn(move || {
                    as_parallel_worker(|| {
                        let mut mine = Vec::new();
                        loop {
                            let i = next.fetch_add(1, Ordering::Relaxed);
                            let Some(item) = items.get(i) else {
                                break;
                            };
                            mine.push((i, f(item)));
                        }
                        mine
                    })
                })
            })
            .collect();
        handles
            .into_iter()
            .flat_map(|h| match h.join() {
                Ok(v) => v,
                Err(p) => std::panic::resume_unwind(p),
            })
            .collect()
    });
    done.sort_unstable_by_key(|d| d.0);
    done.into_iter().map(|d| d.1).collect()
}

/// [`par_map`] taking the items in falling order of `cost`: with the dearest started first, the
/// cores finish together (longest-processing-time-first scheduling; Graham 1969) instead of one
/// finishing the dearest item alone. The results are in the order of `items`.
pub fn par_map_dearest_first<T: Sync, R: Send>(
    items: &[T],
    cost: impl Fn(&T) -> f64,
    f: impl Fn(&T) -> R + Sync,
) -> Vec<R> {
    let mut order: Vec<usize> = (0..items.len()).collect();
    order.sort_by(|&a, &b| cost(&items[b]).total_cmp(&cost(&items[a])));
    let done = par_map(&order, |&i| f(&items[i]));
    let mut out: Vec<Option<R>> = std::iter::repeat_with(|| None).take(items.len()).collect();
    for (i, r) in order.into_iter().zip(done) {
        out[i] = Some(r);
    }
    out.into_iter().flatten().collect()
}

/// The upper median (element `len / 2` in sorted order); `None` for no values.
pub fn median(mut v: Vec<f64>) -> Option<f64> {
    if v.is_empty() {
        return None;
    }
    let m = v.len() / 2;
    Some(*v.select_nth_unstable_by(m, f64::total_cmp).1)
}

/// Index of the value in `xs` nearest `x` (0 for an empty slice).
pub fn nearest_index(xs: &[f64], x: f64) -> usize {
    xs.iter()
        .enumerate()
        .min_by(|a, b| (a.1 - x).abs().total_cmp(&(b.1 - x).abs()))
        .map_or(0, |(i, _)| i)
}

/// The half-power points of a peak at index `peak` of the curve `ys(xs)`: where it first falls
/// to peak/√2 on each side (linear interpolation), `None` on a side where it rises above the
/// peak first or never falls that far.
pub fn half_power_points(xs: &[f64], ys: &[f64], peak: usize) -> (Option<f64>, Option<f64>) {
    let n = xs.len().min(ys.len());
    let top = ys[peak];
    let half = top / std::f64::consts::SQRT_2;
    let cross = |range: &mut dyn Iterator<Item = usize>| -> Option<f64> {
        let mut prev = peak;
        for j in range {
            if ys[j] > top {
                return None;
            }
            if ys[j] <= half {
                let (y0, y1, x0, x1) = (ys[prev], ys[j], xs[prev], xs[j]);
                return Some(if y1 == y0 {
                    x1
                } else {
                    x0 + (half - y0) * (x1 - x0) / (y1 - y0)
                });
            }
            prev = j;
        }
        None
    };
    (cross(&mut (0..peak).rev()), cross(&mut (peak + 1..n)))
}

/// Vertex (x, y) of the parabola through three points, when it opens downward (a maximum);
/// x is kept within the points.
pub fn parabolic_peak(x: [f64; 3], y: [f64; 3]) -> Option<(f64, f64)> {
    let den = (x[0] - x[1]) * (x[0] - x[2]) * (x[1] - x[2]);
    if den == 0.0 {
        return None;
    }
    let pa = (x[2] * (y[1] - y[0]) + x[1] * (y[0] - y[2]) + x[0] * (y[2] - y[1])) / den;
    let pb =
        (x[2] * x[2] * (y[0] - y[1]) + x[1] * x[1] * (y[2] - y[0]) + x[0] * x[0] * (y[1] - y[2]))
            / den;
    if pa >= 0.0 {
        return None;
    }
    let xv = (-pb / (2.0 * pa)).clamp(x[0].min(x[2]), x[0].max(x[2]));
    let pc = y[1] - pa * x[1] * x[1] - pb * x[1];
    Some((xv, pa * xv * xv + pb * xv + pc))
}

/// Whether every entry is finite.
pub fn all_finite(m: &DMatrix<f64>) -> bool {
    finite(m.as_slice())
}

/// Σ f(v) over `x` with eight independent accumulators, which the compiler vectorises (a plain
/// sum is one chain of dependent additions). Differs from the sequential sum by rounding only.
pub fn lane_sum(x: &[f64], f: impl Fn(f64) -> f64) -> f64 {
    let mut acc = [0.0f64; 8];
    let (blocks, rest) = x.as_chunks::<8>();
    for b in blocks {
        for (a, &v) in acc.iter_mut().zip(b) {
            *a += f(v);
        }
    }
    acc.iter().sum::<f64>() + rest.iter().map(|&v| f(v)).sum::<f64>()
}

/// Mean and rms deviation from it, in one pass: sums of `v − x[0]` and its square in eight
/// lanes (the shift keeps the square's sum from cancelling against a large offset). `(0, 0)`
/// for an empty slice.
pub fn mean_rms(x: &[f64]) -> (f64, f64) {
    let Some(&r) = x.first() else {
        return (0.0, 0.0);
    };
    let (mut s1, mut s2) = ([0.0f64; 8], [0.0f64; 8]);
    let (blocks, rest) = x.as_chunks::<8>();
    for b in blocks {
        for j in 0..8 {
            let d = b[j] - r;
            s1[j] += d;
            s2[j] += d * d;
        }
    }
    let (mut t1, mut t2) = (s1.iter().sum::<f64>(), s2.iter().sum::<f64>());
    for &v in rest {
        t1 += v - r;
        t2 += (v - r) * (v - r);
    }
    let n = x.len() as f64;
    let m = t1 / n;
    (r + m, (t2 / n - m * m).max(0.0).sqrt())
}

/// Smallest and largest value, in eight lanes of plain comparisons (which the compiler keeps in
/// vector registers; `f64::min`/`max` and their NaN rule do not vectorise). For finite samples;
/// `(∞, −∞)` for an empty slice.
pub fn extrema(x: &[f64]) -> (f64, f64) {
    let (mut lo, mut hi) = ([f64::INFINITY; 8], [f64::NEG_INFINITY; 8]);
    let (blocks, rest) = x.as_chunks::<8>();
    for b in blocks {
        for j in 0..8 {
            lo[j] = if b[j] < lo[j] { b[j] } else { lo[j] };
            hi[j] = if b[j] > hi[j] { b[j] } else { hi[j] };
        }
    }
    let fold = |a: &[f64], init: f64, less: fn(f64, f64) -> bool| {
        a.iter()
            .chain(rest)
            .fold(init, |m, &v| if less(v, m) { v } else { m })
    };
    (
        fold(&lo, f64::INFINITY, |v, m| v < m),
        fold(&hi, f64::NEG_INFINITY, |v, m| v > m),
    )
}

/// Whether every value is finite. Blocks are tested without an early exit inside, which the
/// compiler vectorises: a scan of long recordings at memory speed.
pub fn finite(x: &[f64]) -> bool {
    x.chunks(1024)
        .all(|c| c.iter().fold(true, |ok, v| ok & v.is_finite()))
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

/// The lowest `count` eigenpairs of the sparse symmetric pencil K φ = λ M φ (M positive definite,
/// K positive semi-definite: a free part's rigid-body modes have λ = 0), by subspace iteration on
/// the shifted inverse (K + c M)⁻¹ M (Bathe, Finite Element Procedures, 1996, §11.6). The sparse
/// Cholesky factor is nalgebra-sparse's; each iteration costs a few banded solves, so a mesh of
/// thousands of degrees of freedom takes milliseconds where a dense solve takes seconds.
///
/// Returns the eigenvalues (ascending) and M-orthonormal eigenvectors (columns); `None` when the
/// shifted matrix cannot be factored, the input is not finite, or the iteration does not converge
/// to 1e-10 (relative) within 300 steps.
pub fn lowest_modes_sparse(
    k: &nalgebra_sparse::CscMatrix<f64>,
    m: &nalgebra_sparse::CscMatrix<f64>,
    count: usize,
) -> Option<(Vec<f64>, DMatrix<f64>)> {
    use nalgebra_sparse::factorization::CscCholesky;
    let n = k.nrows();
    if n == 0 || count == 0 || m.nrows() != n {
        return None;
    }
    if !k.values().iter().chain(m.values()).all(|v| v.is_finite()) {
        return None;
    }
    let count = count.min(n);
    let q = n.min((2 * count).max(count + 8));
    // The shift: small against the pencil's scale (the mean of K_ii/M_ii) so the lowest modes
    // converge fastest, large enough that K + cM is positive definite with rigid-body modes.
    let diag = |a: &nalgebra_sparse::CscMatrix<f64>, i: usize| {
        a.col(i)
            .row_indices()
            .iter()
            .zip(a.col(i).values())
            .find(|(r, _)| **r == i)
            .map_or(0.0, |(_, v)| *v)
    };
    let ratios: Vec<f64> = (0..n)
        .filter(|&i| diag(m, i) > 0.0)
        .map(|i| diag(k, i).abs() / diag(m, i))
        .filter(|r| *r > 0.0)
        .collect();
    let scale = if ratios.is_empty() {
        1.0
    } else {
        ratios.iter().map(|r| r.ln()).sum::<f64>() / ratios.len() as f64
    }
    .exp();
    let shift = 1e-6 * scale;
    let a = k + &(m * shift);
    let chol = CscCholesky::factor(&a).ok()?;
    // Start: the mass diagonal and deterministic pseudo-random vectors.
    let mut state: u64 = 0x2545_f491_4f6c_dd1d;
    let mut x = DMatrix::<f64>::from_fn(n, q, |i, j| {
        if j == 0 {
            diag(m, i)
        } else {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        }
    });
    let mut previous: Option<Vec<f64>> = None;
    for step in 0..300 {
        let y = m * &x;
        // The solve scales each direction by 1/(λ + c), which spans many decades between the
        // rigid-body and the highest wanted modes: an orthonormal basis of the same span keeps
        // the projected matrices well conditioned.
        let z = chol.solve(&y).qr().q();
        if !all_finite(&z) {
            return None;
        }
        let kr = z.tr_mul(&(k * &z));
        let mr = z.tr_mul(&(m * &z));
        let kr = (&kr + kr.transpose()) * 0.5;
        let mr = (&mr + mr.transpose()) * 0.5;
        let lm = mr.cholesky()?.l();
        let lk = lm.solve_lower_triangular(&kr)?;
        let c = lm.solve_lower_triangular(&lk.transpose())?;
        let c = (&c + c.transpose()) * 0.5;
        let eig = symmetric_eigen(c)?;
        let mut order: Vec<usize> = (0..q).collect();
        order.sort_by(|&i, &j| eig.eigenvalues[i].total_cmp(&eig.eigenvalues[j]));
        let values: Vec<f64> = order.iter().map(|&i| eig.eigenvalues[i]).collect();
        let v = DMatrix::<f64>::from_fn(q, q, |r, c| eig.eigenvectors[(r, order[c])]);
        let qm = lm.transpose().solve_upper_triangular(&v)?;
        x = &z * qm;
        if !all_finite(&x) {
            return None;
        }
        let top = values[count - 1].abs().max(f64::MIN_POSITIVE);
        // Largest relative change of the wanted eigenvalues since the last step (rigid-body
        // modes, λ ≈ 0, measured against the highest wanted one).
        let change = previous.as_ref().map(|p| {
            (0..count)
                .map(|i| (values[i] - p[i]).abs() / values[i].abs().max(1e-3 * top))
                .fold(0.0f64, f64::max)
        });
        // Converged, or settled at round-off (an ill-conditioned mesh can keep the last digits
        // moving at 1e-11 for ever).
        if change.is_some_and(|c| c <= 1e-10 || (step >= 60 && c <= 1e-8)) {
            let vecs = x.columns(0, count).into_owned();
            return Some((values[..count].to_vec(), vecs));
        }
        previous = Some(values);
    }
    None
}

/// Eigenvectors of the dense symmetric-definite pencil K φ = λ M φ (M positive definite), all of
/// them, ascending, M-orthonormal: Cholesky M = L Lᵀ, the symmetric eigenproblem of L⁻¹ K L⁻ᵀ,
/// φ = L⁻ᵀ v. `None` when M is not positive definite or the input is not finite.
pub fn symmetric_pencil(k: &DMatrix<f64>, m: &DMatrix<f64>) -> Option<(Vec<f64>, DMatrix<f64>)> {
    if !all_finite(k) || !all_finite(m) || k.nrows() != m.nrows() {
        return None;
    }
    let l = m.clone().cholesky()?.l();
    let a = l.solve_lower_triangular(k)?;
    let c = l.solve_lower_triangular(&a.transpose())?;
    let c = (&c + c.transpose()) * 0.5;
    let eig = symmetric_eigen(c)?;
    let n = k.nrows();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by(|&i, &j| eig.eigenvalues[i].total_cmp(&eig.eigenvalues[j]));
    let values = order.iter().map(|&i| eig.eigenvalues[i]).collect();
    let v = DMatrix::<f64>::from_fn(n, n, |r, c| eig.eigenvectors[(r, order[c])]);
    let phi = l.transpose().solve_upper_triangular(&v)?;
    Some((values, phi))
}

/// The eigenvector of the complex matrix `a` for its (computed) eigenvalue `lambda`, by two
/// steps of inverse iteration with nalgebra's LU on `a − μI`, μ a hair away from `lambda` so the
/// factor stays regular. Unit 2-norm; `None` when the solve fails or is not finite.
pub fn eigenvector_near(
    a: &DMatrix<Complex64>,
    lambda: Complex64,
) -> Option<nalgebra::DVector<Complex64>> {
    let n = a.nrows();
    let scale = lambda.norm().max(1e-300);
    let mu = lambda + Complex64::new(scale * 1e-11, scale * 1e-11);
    let shifted = a - DMatrix::<Complex64>::identity(n, n) * mu;
    let lu = shifted.lu();
    let mut x = nalgebra::DVector::<Complex64>::from_fn(n, |i, _| {
        Complex64::new(1.0 + 0.1 * (i % 7) as f64, 0.05 * (i % 5) as f64)
    });
    for _ in 0..3 {
        x = lu.solve(&x)?;
        let norm = x.norm();
        if !(norm.is_finite() && norm > 0.0) {
            return None;
        }
        x /= Complex64::new(norm, 0.0);
    }
    Some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Population mean and standard deviation (the definitions; NumPy's `mean` and `std` with
    /// its default ddof = 0 give the same), on a record with a large offset, where a one-pass
    /// sum of squares without the shift would lose most digits.
    #[test]
    fn one_pass_mean_and_rms_match_the_definitions() {
        for n in [1usize, 7, 8, 9, 100, 1037] {
            let x: Vec<f64> = (0..n)
                .map(|i| 1.0e4 + (i as f64 * 0.37).sin() * 1e-3 + (i % 5) as f64 * 1e-4)
                .collect();
            let mean = x.iter().sum::<f64>() / n as f64;
            let sd = (x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n as f64).sqrt();
            let (m, r) = mean_rms(&x);
            assert!((m - mean).abs() < 1e-10, "n {n}: {m} vs {mean}");
            assert!((r - sd).abs() <= 1e-9 * sd.max(1e-12), "n {n}: {r} vs {sd}");
        }
        assert_eq!(mean_rms(&[]), (0.0, 0.0));
    }

    #[test]
    fn extrema_match_a_plain_scan() {
        for n in [1usize, 5, 8, 13, 64, 1001] {
            let x: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1009) as f64 - 500.5).collect();
            let lo = x.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            assert_eq!(extrema(&x), (lo, hi), "n {n}");
        }
        assert_eq!(extrema(&[]), (f64::INFINITY, f64::NEG_INFINITY));
    }

    #[test]
    fn dearest_first_returns_results_in_the_items_order() {
        let items: Vec<u64> = vec![5, 1, 9, 3, 7, 2, 8];
        let out = par_map_dearest_first(&items, |&x| x as f64, |&x| x * 10);
        assert_eq!(out, vec![50, 10, 90, 30, 70, 20, 80]);
        assert!(par_map_dearest_first(&[] as &[u64], |_| 0.0, |&x| x).is_empty());
    }

    /// par_map keeps the items' order, and runs inline inside a parallel section (common
    /// practice: no nested thread pools).
    #[test]
    fn par_map_keeps_order_and_nests_inline() {
        let items: Vec<u64> = (0..1000).collect();
        let squares = par_map(&items, |&v| v * v);
        assert_eq!(squares, items.iter().map(|v| v * v).collect::<Vec<_>>());
        let inner = par_map(&[0u8, 1], |_| {
            let outer = in_parallel_section();
            let threads: Vec<std::thread::ThreadId> =
                par_map(&[0u8, 1, 2], |_| std::thread::current().id());
            (
                outer,
                threads.iter().all(|t| *t == std::thread::current().id()),
            )
        });
        if std::thread::available_parallelism().map_or(1, |n| n.get()) > 1 {
            assert!(
                inner.iter().all(|&(outer, same)| outer && same),
                "{inner:?}"
            );
        }
        assert!(!in_parallel_section());
    }

    /// Sums and finiteness tests against plain loops (values exactly representable).
    #[test]
    fn lane_sum_and_finite_match_plain_loops() {
        let x: Vec<f64> = (0..1037).map(|i| (i % 17) as f64 - 8.0).collect();
        assert_eq!(lane_sum(&x, |v| v), x.iter().sum::<f64>());
        assert_eq!(
            lane_sum(&x, |v| v * v),
            x.iter().map(|v| v * v).sum::<f64>()
        );
        assert!(finite(&x));
        let mut y = x.clone();
        y[1030] = f64::NAN;
        assert!(!finite(&y));
        y[1030] = f64::NEG_INFINITY;
        assert!(!finite(&y));
    }

    /// The lowest modes of a fixed–fixed chain of 400 equal masses and springs against the
    /// closed form λ_j = (4k/m) sin²(jπ/(2(N+1))) (any vibration text, e.g. Meirovitch 2001).
    #[test]
    fn sparse_lowest_modes_of_a_spring_chain_match_the_closed_form() {
        let n = 400;
        let (kk, mm) = (1.0e6, 2.0);
        let mut kc = nalgebra_sparse::CooMatrix::new(n, n);
        let mut mc = nalgebra_sparse::CooMatrix::new(n, n);
        for i in 0..n {
            kc.push(i, i, 2.0 * kk);
            mc.push(i, i, mm);
            if i + 1 < n {
                kc.push(i, i + 1, -kk);
                kc.push(i + 1, i, -kk);
            }
        }
        let k = nalgebra_sparse::CscMatrix::from(&kc);
        let m = nalgebra_sparse::CscMatrix::from(&mc);
        let (vals, vecs) = lowest_modes_sparse(&k, &m, 6).expect("converges");
        for (j, v) in vals.iter().enumerate() {
            let s = ((j + 1) as f64 * std::f64::consts::PI / (2.0 * (n + 1) as f64)).sin();
            let exact = 4.0 * kk / mm * s * s;
            assert!((v / exact - 1.0).abs() < 1e-9, "mode {j}: {v} vs {exact}");
        }
        // M-orthonormal.
        let g = vecs.tr_mul(&(&m * &vecs));
        assert!((g - DMatrix::<f64>::identity(6, 6)).abs().max() < 1e-9);
    }

    #[test]
    fn peak_helpers_on_exact_curves() {
        // y = 5 − (x − 2.3)² has its vertex at (2.3, 5) (any three points of it).
        let f = |x: f64| 5.0 - (x - 2.3) * (x - 2.3);
        let (x, y) = parabolic_peak([2.0, 2.5, 3.0], [f(2.0), f(2.5), f(3.0)]).expect("a maximum");
        assert!((x - 2.3).abs() < 1e-12 && (y - 5.0).abs() < 1e-12);
        // A triangle 0, 1, 0 over 0, 1, 2 falls to 1/√2 at 1 ∓ (1 − 1/√2).
        let (a, b) = half_power_points(&[0.0, 1.0, 2.0], &[0.0, 1.0, 0.0], 1);
        let d = 1.0 - std::f64::consts::FRAC_1_SQRT_2;
        assert!((a.expect("left") - (1.0 - d)).abs() < 1e-12);
        assert!((b.expect("right") - (1.0 + d)).abs() < 1e-12);
        assert_eq!(nearest_index(&[0.0, 0.4, 0.9], 0.7), 2);
    }

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

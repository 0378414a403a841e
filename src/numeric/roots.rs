//! Roots of real polynomials by the Aberth–Ehrlich simultaneous iteration (Aberth 1973; Bini,
//! "Numerical computation of polynomial zeros by means of Aberth's method", Numerical
//! Algorithms 13, 1996), started from Bini's Newton-polygon circles.
//!
//! The model orders of a stabilization diagram each need every root of a denominator of degree
//! up to ~100. The companion matrix's Schur form costs ~25p³ and keeps a p × p basis nobody
//! reads; the iteration here costs ~20p² per sweep, converges in a few sweeps, and stops each
//! root when the polynomial's value there is within the rounding error of evaluating it (a
//! backward-stable root). A polynomial that does not settle within the sweep budget (roots of
//! high multiplicity) returns `None`, and the caller falls back to the companion matrix.

use crate::Complex64;

/// Sweeps before the iteration gives up; simple roots converge cubically, so a well-started
/// iteration needs a few dozen at most.
const MAX_SWEEPS: usize = 120;

/// Roots of the monic polynomial z^p + c[p−1]·z^{p−1} + … + c[0] (`c` from the constant term
/// up, length p). A root whose imaginary part lies within its own error bound is returned as
/// real (imaginary part exactly 0), as a real Schur form returns real eigenvalues. `None` for
/// non-finite coefficients or when the iteration does not converge.
pub fn polynomial_roots(c: &[f64]) -> Option<Vec<Complex64>> {
    let p = c.len();
    if !c.iter().all(|v| v.is_finite()) {
        return None;
    }
    if p == 0 {
        return Some(Vec::new());
    }
    // Zero roots split off exactly: z^k · (rest); the iteration would only creep towards them.
    let zeros = c.iter().take_while(|&&v| v == 0.0).count();
    let c = &c[zeros..];
    let mut roots = vec![Complex64::new(0.0, 0.0); zeros];
    if c.is_empty() {
        return Some(roots);
    }
    let mut z = initial_guesses(c);
    let q = c.len();
    let mu = 4.0 * (q + 1) as f64 * f64::EPSILON;
    let mut done = vec![false; q];
    let mut radius = vec![0.0f64; q];
    let mut settled = 0;
    for _ in 0..MAX_SWEEPS {
        for k in 0..q {
            if done[k] {
                continue;
            }
            let (ratio, value, bound) = newton_ratio(c, z[k]);
            if !ratio.re.is_finite() || !ratio.im.is_finite() {
                return None;
            }
            if value <= mu * bound {
                done[k] = true;
                radius[k] = q as f64 * ratio.norm();
                settled += 1;
                continue;
            }
            let s: Complex64 = (0..q)
                .filter(|&j| j != k)
                .map(|j| (z[k] - z[j]).inv())
                .sum();
            let step = ratio / (Complex64::new(1.0, 0.0) - ratio * s);
            if !step.re.is_finite() || !step.im.is_finite() {
                return None;
            }
            z[k] -= step;
        }
        if settled == q {
            for (zk, r) in z.iter_mut().zip(&radius) {
                if zk.im.abs() <= *r {
                    zk.im = 0.0;
                }
            }
            roots.extend(z);
            return Some(roots);
        }
    }
    None
}

/// P(z)/P′(z), |P(z)| and the bound Σ|c_i||z|^i on the rounding error of evaluating it (both
/// scaled alike). Outside the unit circle the reversed polynomial in w = 1/z is evaluated
/// instead, so that no power of a large root overflows: P(z) = z^p·Q(w) and
/// P/P′ = z·Q / (p·Q − w·Q′).
fn newton_ratio(c: &[f64], z: Complex64) -> (Complex64, f64, f64) {
    let p = c.len();
    let one = Complex64::new(1.0, 0.0);
    if z.norm_sqr() <= 1.0 {
        let r = z.norm();
        let (mut v, mut d, mut b) = (one, Complex64::new(0.0, 0.0), 1.0);
        for &ci in c.iter().rev() {
            d = d * z + v;
            v = v * z + ci;
            b = b * r + ci.abs();
        }
        (v / d, v.norm(), b)
    } else {
        let w = z.inv();
        let r = w.norm();
        // Q(w) = c_0 w^p + c_1 w^{p−1} + … + c_{p−1} w + 1.
        let (mut v, mut d, mut b) = (
            Complex64::new(c[0], 0.0),
            Complex64::new(0.0, 0.0),
            c[0].abs(),
        );
        for &ci in c[1..].iter().chain(std::iter::once(&1.0)) {
            d = d * w + v;
            v = v * w + ci;
            b = b * r + ci.abs();
        }
        (z * v / (v * p as f64 - w * d), v.norm(), b)
    }
}

/// Bini's starting points: for each edge of the upper convex hull of (i, log|c_i|), as many
/// points as the edge spans, evenly on the circle whose radius is the edge's slope, each circle
/// turned a little so that no start is real and no two circles line up.
fn initial_guesses(c: &[f64]) -> Vec<Complex64> {
    let p = c.len();
    let logs: Vec<(usize, f64)> = c
        .iter()
        .chain(std::iter::once(&1.0))
        .enumerate()
        .filter(|(_, v)| **v != 0.0)
        .map(|(i, v)| (i, v.abs().ln()))
        .collect();
    // Upper hull by a monotone chain over increasing i.
    let mut hull: Vec<(usize, f64)> = Vec::with_capacity(logs.len());
    for &pt in &logs {
        while hull.len() >= 2 {
            let (a, b) = (hull[hull.len() - 2], hull[hull.len() - 1]);
            let cross = (b.0 - a.0) as f64 * (pt.1 - a.1) - (b.1 - a.1) * (pt.0 - a.0) as f64;
            if cross >= 0.0 {
                hull.pop();
            } else {
                break;
            }
        }
        hull.push(pt);
    }
    let mut z = Vec::with_capacity(p);
    const TURN: f64 = 0.7;
    for e in hull.windows(2) {
        let ((i, li), (j, lj)) = (e[0], e[1]);
        let m = j - i;
        let radius = ((li - lj) / m as f64).exp();
        for k in 0..m {
            let angle = std::f64::consts::TAU * (k as f64 / m as f64 + i as f64 / p as f64) + TURN;
            z.push(Complex64::from_polar(radius, angle));
        }
    }
    z
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Monic coefficients (constant term first) of Π (z − r).
    fn from_roots(roots: &[Complex64]) -> Vec<f64> {
        let mut c = vec![Complex64::new(1.0, 0.0)];
        for r in roots {
            let mut next = vec![Complex64::new(0.0, 0.0); c.len() + 1];
            for (i, ci) in c.iter().enumerate() {
                next[i + 1] += ci;
                next[i] -= ci * r;
            }
            c = next;
        }
        c.pop();
        c.into_iter().map(|v| v.re).collect()
    }

    fn assert_same_roots(found: &[Complex64], expected: &[Complex64], tol: f64) {
        assert_eq!(found.len(), expected.len());
        let mut left: Vec<Complex64> = found.to_vec();
        for e in expected {
            let (i, d) = left
                .iter()
                .enumerate()
                .map(|(i, f)| (i, (f - e).norm()))
                .min_by(|a, b| a.1.total_cmp(&b.1))
                .expect("a root is left");
            assert!(
                d <= tol * e.norm().max(1.0),
                "{e} found as {} ({d:e})",
                left[i]
            );
            left.swap_remove(i);
        }
    }

    #[test]
    fn roots_of_unity_where_unshifted_qr_stalls() {
        // z^n − 1: roots e^{2πik/n} (de Moivre); its companion matrix is the cyclic shift, the
        // textbook case where the unshifted double-shift QR makes no progress (Golub & Van
        // Loan, Matrix Computations, §7.5).
        for n in [1usize, 2, 7, 16, 64, 101] {
            let mut c = vec![0.0; n];
            c[0] = -1.0;
            let r = polynomial_roots(&c).expect("converges");
            let e: Vec<Complex64> = (0..n)
                .map(|k| Complex64::from_polar(1.0, std::f64::consts::TAU * k as f64 / n as f64))
                .collect();
            assert_same_roots(&r, &e, 1e-12);
            // 1 is real, and so is −1 for even n.
            let real = if n % 2 == 0 { 2 } else { 1 };
            assert_eq!(r.iter().filter(|z| z.im == 0.0).count(), real);
        }
    }

    #[test]
    fn chebyshev_roots() {
        // T_n has the n real roots cos((2k − 1)π / 2n) (Abramowitz & Stegun 22.16.4); monic
        // coefficients from T_{n+1} = 2z·T_n − T_{n−1}.
        for n in [5usize, 12, 20] {
            let mut t0 = vec![1.0];
            let mut t1 = vec![0.0, 1.0];
            for _ in 1..n {
                let mut t2 = vec![0.0; t1.len() + 1];
                for (i, v) in t1.iter().enumerate() {
                    t2[i + 1] += 2.0 * v;
                }
                for (i, v) in t0.iter().enumerate() {
                    t2[i] -= v;
                }
                t0 = std::mem::replace(&mut t1, t2);
            }
            let lead = t1[n];
            let c: Vec<f64> = t1[..n].iter().map(|v| v / lead).collect();
            let r = polynomial_roots(&c).expect("converges");
            let e: Vec<Complex64> = (1..=n)
                .map(|k| {
                    let x = ((2 * k - 1) as f64 * std::f64::consts::PI / (2 * n) as f64).cos();
                    Complex64::new(x, 0.0)
                })
                .collect();
            assert_same_roots(&r, &e, 1e-9);
            assert!(r.iter().all(|z| z.im == 0.0), "{r:?}");
        }
    }

    #[test]
    fn lightly_damped_poles_inside_the_unit_circle_and_far_roots() {
        // z-domain poles of lightly damped modes, z = e^{λΔt} (λ = −ζω ± iω√(1 − ζ²)), with real
        // roots, a zero root and roots far outside the unit circle as an LSCF denominator has.
        // Separated as they are at a band's usual sampling: roots crowded near z = 1 are
        // ill-conditioned in the coefficients themselves, whatever finds them.
        let dt = 1.0 / 8192.0;
        let mut e = Vec::new();
        for (f, zeta) in [
            (101.0, 0.0005),
            (180.0, 0.0005),
            (800.0, 0.001),
            (2711.0, 0.02),
        ] {
            let w = std::f64::consts::TAU * f;
            let l = Complex64::new(-zeta * w, w * (1.0f64 - zeta * zeta).sqrt());
            let z = (l * dt).exp();
            e.push(z);
            e.push(z.conj());
        }
        for x in [0.3, -0.7, 0.0, 25.0, -140.0] {
            e.push(Complex64::new(x, 0.0));
        }
        e.push(Complex64::new(3.0, 9.0));
        e.push(Complex64::new(3.0, -9.0));
        let c = from_roots(&e);
        let r = polynomial_roots(&c).expect("converges");
        assert_same_roots(&r, &e, 1e-6);
        assert_eq!(r.iter().filter(|z| z.im == 0.0).count(), 5);
    }

    #[test]
    fn non_finite_coefficients_are_refused() {
        assert!(polynomial_roots(&[1.0, f64::NAN]).is_none());
        assert!(polynomial_roots(&[f64::INFINITY]).is_none());
        assert_eq!(polynomial_roots(&[]), Some(Vec::new()));
    }
}

//! Mode-shape arithmetic: MAC, MPC, mean phase deviation, principal-axis rotation, normalisation.

use crate::Complex64;

/// Modal assurance criterion |a^H b|² / ((a^H a)(b^H b)) (Allemang & Brown 1982; Allemang 2003).
/// 0 when either vector is zero.
///
/// # Panics
/// If the vectors differ in length.
pub fn mac(a: &[Complex64], b: &[Complex64]) -> f64 {
    assert_eq!(a.len(), b.len(), "MAC of vectors of different length");
    let ab: Complex64 = a.iter().zip(b).map(|(x, y)| x.conj() * y).sum();
    let aa: f64 = a.iter().map(|x| x.norm_sqr()).sum();
    let bb: f64 = b.iter().map(|x| x.norm_sqr()).sum();
    if aa > 0.0 && bb > 0.0 {
        ab.norm_sqr() / (aa * bb)
    } else {
        0.0
    }
}

/// MAC of real vectors.
pub fn mac_real(a: &[f64], b: &[f64]) -> f64 {
    let ca: Vec<Complex64> = a.iter().map(|&x| Complex64::new(x, 0.0)).collect();
    let cb: Vec<Complex64> = b.iter().map(|&x| Complex64::new(x, 0.0)).collect();
    mac(&ca, &cb)
}

/// Modal phase collinearity (Juang & Pappa 1985; formula per Pappa, Elliott & Schenk 1993, from
/// memory): with S_xx = Reᵀ·Re, S_yy = Imᵀ·Im, S_xy = Reᵀ·Im and λ₁ ≥ λ₂ the eigenvalues of
/// [[S_xx, S_xy], [S_xy, S_yy]], MPC = ((λ₁ − λ₂)/(λ₁ + λ₂))². 1 for a real (or rotated real) vector.
pub fn mpc(v: &[Complex64]) -> f64 {
    let sxx: f64 = v.iter().map(|c| c.re * c.re).sum();
    let syy: f64 = v.iter().map(|c| c.im * c.im).sum();
    let sxy: f64 = v.iter().map(|c| c.re * c.im).sum();
    let tr = sxx + syy;
    if tr <= 0.0 {
        return 0.0;
    }
    // Eigenvalues of a symmetric 2×2 in closed form: λ₁ − λ₂ = √((S_xx − S_yy)² + 4S_xy²).
    let diff = ((sxx - syy).powi(2) + 4.0 * sxy * sxy).sqrt();
    (diff / tr).powi(2)
}

/// Angle θ of the principal axis of the complex vector's scatter (the direction that maximises
/// Σ Re(v·e^{−jθ})²).
pub fn principal_angle(v: &[Complex64]) -> f64 {
    let sxx: f64 = v.iter().map(|c| c.re * c.re).sum();
    let syy: f64 = v.iter().map(|c| c.im * c.im).sum();
    let sxy: f64 = v.iter().map(|c| c.re * c.im).sum();
    0.5 * (2.0 * sxy).atan2(sxx - syy)
}

/// Mean phase deviation from the principal axis, degrees, weighted by magnitude (0 for a real mode).
pub fn mean_phase_deviation_deg(v: &[Complex64]) -> f64 {
    let th = principal_angle(v);
    let rot = Complex64::from_polar(1.0, -th);
    let (mut num, mut den) = (0.0, 0.0);
    for c in v {
        let r = c * rot;
        let m = r.norm();
        if m > 0.0 {
            // Deviation from the real axis, folded so 0° and 180° both count as in line.
            let d = r.im.atan2(r.re).abs();
            let d = d.min(std::f64::consts::PI - d);
            num += m * d;
            den += m;
        }
    }
    if den > 0.0 {
        (num / den).to_degrees()
    } else {
        0.0
    }
}

/// Rotates a complex shape onto its principal axis, signs it so that entry `sign_ref` (the
/// reference station, when known and not at a node) — else the largest entry — is positive, and
/// scales the largest magnitude to 1.
pub fn normalise(v: &[Complex64], sign_ref: Option<usize>) -> Vec<Complex64> {
    let rot = Complex64::from_polar(1.0, -principal_angle(v));
    let mut r: Vec<Complex64> = v.iter().map(|c| c * rot).collect();
    let (imax, big) = r
        .iter()
        .enumerate()
        .map(|(i, c)| (i, c.norm()))
        .fold((0, 0.0), |acc, x| if x.1 > acc.1 { x } else { acc });
    if big == 0.0 {
        return r;
    }
    let pivot = match sign_ref {
        Some(i) if i < r.len() && r[i].norm() > 0.05 * big => i,
        _ => imax,
    };
    let s = if r[pivot].re < 0.0 { -1.0 } else { 1.0 } / big;
    r.iter_mut().for_each(|c| *c *= s);
    r
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    #[test]
    fn mac_by_definition() {
        // Allemang 2003: MAC = 1 for proportional vectors (any complex scale), 0 for orthogonal.
        let a = [c(1.0, 0.0), c(2.0, 0.0), c(-1.0, 0.0)];
        let b: Vec<Complex64> = a.iter().map(|x| x * c(0.3, -2.0)).collect();
        assert!((mac(&a, &b) - 1.0).abs() < 1e-14);
        assert!(mac(&[c(1.0, 0.0), c(0.0, 0.0)], &[c(0.0, 0.0), c(1.0, 0.0)]).abs() < 1e-15);
        // A worked value: a = (1, 1), b = (1, 0): |1|² / (2·1) = 0.5.
        assert!((mac_real(&[1.0, 1.0], &[1.0, 0.0]) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn mpc_of_real_and_rotated_vectors_is_one() {
        let real = [c(1.0, 0.0), c(-0.5, 0.0), c(0.2, 0.0)];
        assert!((mpc(&real) - 1.0).abs() < 1e-14);
        let rot: Vec<Complex64> = real
            .iter()
            .map(|x| x * Complex64::from_polar(1.0, 0.7))
            .collect();
        assert!((mpc(&rot) - 1.0).abs() < 1e-12);
        assert!(mean_phase_deviation_deg(&rot) < 1e-9);
        // A circularly "travelling" vector (1, j) has MPC 0.
        assert!(mpc(&[c(1.0, 0.0), c(0.0, 1.0)]) < 1e-14);
    }

    #[test]
    fn normalise_rotates_signs_and_scales() {
        let v: Vec<Complex64> = [1.0, -2.0, 0.5].iter().map(|&x| c(0.0, x)).collect();
        let n = normalise(&v, Some(0));
        assert!((n[0].re - 0.5).abs() < 1e-12 && (n[1].re + 1.0).abs() < 1e-12);
        assert!(n.iter().all(|x| x.im.abs() < 1e-12));
    }
}

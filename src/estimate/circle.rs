//! Circle-fit damping (Kennedy & Pancu 1947; Ewins 2000, from memory): near a resonance the
//! Nyquist plot of mobility is a circle; the natural frequency is where the angle swept per unit
//! ω² is largest, and for points a above and b below it,
//! ζ = (ω_a² − ω_b²) / (2ω_r(ω_a tan(θ_a/2) + ω_b tan(θ_b/2))),
//! θ the angles at the centre between each point and the resonance point.

use nalgebra::{Matrix3, Vector3};

use crate::Complex64;

const TAU: f64 = 2.0 * std::f64::consts::PI;

/// Fits the mobility circle of accelerance `h` over lines `lo..=hi` (at least 5 lines).
/// Returns (natural frequency Hz, damping ratio), both as measured.
pub fn circle_fit(freq_hz: &[f64], h: &[Complex64], lo: usize, hi: usize) -> Option<(f64, f64)> {
    if hi >= h.len() || hi < lo + 4 {
        return None;
    }
    let pts: Vec<(f64, Complex64)> = (lo..=hi)
        .map(|k| {
            let w = TAU * freq_hz[k];
            (w, h[k] / Complex64::new(0.0, w))
        })
        .collect();
    // Algebraic (Kåsa) fit: x² + y² + Dx + Ey + F = 0 in least squares.
    let (mut ata, mut atb) = (Matrix3::<f64>::zeros(), Vector3::<f64>::zeros());
    for (_, y) in &pts {
        let row = Vector3::new(y.re, y.im, 1.0);
        ata += row * row.transpose();
        atb += row * -(y.re * y.re + y.im * y.im);
    }
    let sol = ata.lu().solve(&atb)?;
    let c = Complex64::new(-sol[0] / 2.0, -sol[1] / 2.0);
    let r2 = c.norm_sqr() - sol[2];
    if r2 <= 0.0 {
        return None;
    }
    // Angles around the centre, unwrapped, and the sweep rate dθ/d(ω²) between neighbours.
    let mut ang: Vec<f64> = pts.iter().map(|(_, y)| (y - c).arg()).collect();
    for i in 1..ang.len() {
        while ang[i] - ang[i - 1] > std::f64::consts::PI {
            ang[i] -= TAU;
        }
        while ang[i] - ang[i - 1] < -std::f64::consts::PI {
            ang[i] += TAU;
        }
    }
    let rate: Vec<f64> = (0..pts.len() - 1)
        .map(|i| (ang[i + 1] - ang[i]).abs() / (pts[i + 1].0.powi(2) - pts[i].0.powi(2)))
        .collect();
    let (im, _) = rate
        .iter()
        .enumerate()
        .fold((0, f64::MIN), |a, (i, &r)| if r > a.1 { (i, r) } else { a });
    if im == 0 || im + 1 >= rate.len() {
        return None;
    }
    // Parabolic peak of the sweep rate over ω² (midpoints of the intervals).
    let mid = |i: usize| 0.5 * (pts[i].0.powi(2) + pts[i + 1].0.powi(2));
    let (x0, x1, x2) = (mid(im - 1), mid(im), mid(im + 1));
    let (y0, y1, y2) = (rate[im - 1], rate[im], rate[im + 1]);
    let den = (x0 - x1) * (x0 - x2) * (x1 - x2);
    let a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / den;
    let b = (x2 * x2 * (y0 - y1) + x1 * x1 * (y2 - y0) + x0 * x0 * (y1 - y2)) / den;
    let w2r = if a < 0.0 {
        (-b / (2.0 * a)).clamp(x0, x2)
    } else {
        x1
    };
    let wr = w2r.sqrt();
    // Angle of the resonance point, interpolated in ω².
    let ar = {
        let k = pts
            .partition_point(|(w, _)| w * w < w2r)
            .clamp(1, pts.len() - 1);
        let (wa, wb) = (pts[k - 1].0.powi(2), pts[k].0.powi(2));
        ang[k - 1] + (ang[k] - ang[k - 1]) * (w2r - wa) / (wb - wa)
    };
    // Average the formula over every pair (one point below, one above).
    let (mut sum, mut count) = (0.0, 0usize);
    for (ib, (wb, _)) in pts.iter().enumerate().filter(|(_, (w, _))| *w < wr) {
        for (ia, (wa, _)) in pts.iter().enumerate().filter(|(_, (w, _))| *w > wr) {
            let (tb, ta) = ((ang[ib] - ar).abs(), (ang[ia] - ar).abs());
            if ta >= std::f64::consts::PI || tb >= std::f64::consts::PI {
                continue;
            }
            let d = 2.0 * wr * (wa * (ta / 2.0).tan() + wb * (tb / 2.0).tan());
            if d > 0.0 {
                sum += (wa * wa - wb * wb) / d;
                count += 1;
            }
        }
    }
    (count > 0).then(|| (wr / TAU, sum / count as f64))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn recovers_an_sdof_pole() {
        // SDOF accelerance −ω²/(k − mω² + jcω), f_n = 250 Hz, ζ = 0.8 % (Ewins 2000 closed form).
        let (fnat, zeta, m) = (250.0, 0.008, 2.0);
        let wn = TAU * fnat;
        let freq: Vec<f64> = (0..200).map(|k| 240.0 + 0.1 * k as f64).collect();
        let h: Vec<Complex64> = freq
            .iter()
            .map(|f| {
                let w = TAU * f;
                -w * w / Complex64::new(m * (wn * wn - w * w), 2.0 * zeta * wn * w * m)
            })
            .collect();
        let (f, z) = circle_fit(&freq, &h, 80, 120).unwrap();
        assert!((f / fnat - 1.0).abs() < 1e-4, "{f}");
        assert!((z / zeta - 1.0).abs() < 0.01, "{z}");
    }
}

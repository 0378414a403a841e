//! Force and exponential windows, and the damping correction for the exponential window.

/// Force window: zero, cosine rise over `taper`, unity for `unity` samples from `start`, cosine
/// fall over `taper`, zero (Fladung 1997: "length" is the unity part). Returns the first index
/// and the values of the non-zero stretch, clipped to a record of `n` samples.
pub fn force_window(n: usize, start: usize, unity: usize, taper: usize) -> (usize, Vec<f64>) {
    let lo = start.saturating_sub(taper);
    let hi = (start + unity + taper).min(n);
    let taper_value =
        |k: usize| 0.5 * (1.0 + (std::f64::consts::PI * k as f64 / (taper + 1) as f64).cos());
    let w = (lo..hi)
        .map(|i| {
            if i < start {
                taper_value(start - i)
            } else if i < start + unity {
                1.0
            } else {
                taper_value(i + 1 - start - unity)
            }
        })
        .collect();
    (lo, w)
}

/// The exponential window over a record of `n` samples: 1 before `t0`, `exp(−(i − t0)·dt/τ)` after.
pub fn exponential(n: usize, t0: usize, dt: f64, tau_s: f64) -> Vec<f64> {
    let mut w = vec![1.0; n];
    apply_exponential(&mut w, t0, dt, tau_s);
    w
}

/// Raises the first `len` samples of `w` from 0 with a half cosine (Hann rise).
pub fn onset_taper(w: &mut [f64], len: usize) {
    for (k, v) in w.iter_mut().take(len).enumerate() {
        *v *= 0.5 * (1.0 - (std::f64::consts::PI * (k as f64 + 0.5) / len as f64).cos());
    }
}

/// Time constant τ (s) of an exponential window that falls to `end_value` after `post_s` seconds:
/// τ = T / ln(1/p) (Fladung 1997). `end_value` = 1 means no window: τ = ∞.
pub fn exponential_tau_s(post_s: f64, end_value: f64) -> f64 {
    if end_value >= 1.0 {
        f64::INFINITY
    } else {
        post_s / (1.0 / end_value).ln()
    }
}

/// Multiplies `x` by `exp(−(n − t0)·dt/τ)` for `n ≥ t0`; samples before `t0` are left as they are.
pub fn apply_exponential(x: &mut [f64], t0: usize, dt: f64, tau_s: f64) {
    if !tau_s.is_finite() {
        return;
    }
    let r = (-dt / tau_s).exp();
    let mut w = 1.0;
    for v in x.iter_mut().skip(t0) {
        *v *= w;
        w *= r;
    }
}

/// Removes the exponential window's added damping from a pole (Laplace shift theorem):
/// the window multiplies the impulse response by e^{−t/τ}, moving every pole by −1/τ, so
/// σ_true = σ_meas − 1/τ with ω_d unchanged. Returns (natural frequency Hz, damping ratio).
pub fn correct_damping(f_meas_hz: f64, zeta_meas: f64, tau_s: f64) -> (f64, f64) {
    let wn = 2.0 * std::f64::consts::PI * f_meas_hz;
    let sigma_m = zeta_meas * wn;
    let wd = wn * (1.0 - zeta_meas * zeta_meas).max(0.0).sqrt();
    let sigma = sigma_m - if tau_s.is_finite() { 1.0 / tau_s } else { 0.0 };
    let wn_true = (sigma * sigma + wd * wd).sqrt();
    (wn_true / (2.0 * std::f64::consts::PI), sigma / wn_true)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn field_notes_example_delta_zeta() {
        // Laplace shift (Fladung 1997), derived: p = 1 %, Δf = 0.5 Hz (T = 2 s), f_n = 200 Hz adds Δζ ≈ 0.18 %.
        let tau = exponential_tau_s(2.0, 0.01);
        let added = 1.0 / (tau * 2.0 * std::f64::consts::PI * 200.0);
        assert!((added - 0.00183).abs() < 5e-5, "{added}");
        // Correcting a measured ζ = 0.0028 gives back ≈ 0.001.
        let (_, z) = correct_damping(200.0, 0.001 + added, tau);
        assert!((z - 0.001).abs() < 1e-6, "{z}");
    }

    #[test]
    fn force_window_shape() {
        let (lo, part) = force_window(20, 5, 4, 2);
        let mut w = [0.0; 20];
        w[lo..lo + part.len()].copy_from_slice(&part);
        assert_eq!(&w[5..9], &[1.0; 4]);
        assert_eq!(w[0], 0.0);
        assert!(w[4] > w[3] && w[3] > 0.0 && w[4] < 1.0);
        assert!(w[9] > w[10] && w[10] > 0.0 && w[9] < 1.0);
        assert_eq!(w[11], 0.0);
        // Symmetric tapers.
        assert_eq!(w[4], w[9]);
        assert_eq!(w[3], w[10]);
    }
}

//! Spectra and FRF estimators: H1, H2, Hv and ordinary coherence (Bendat & Piersol 2010).

use std::sync::Arc;

use realfft::{RealFftPlanner, RealToComplex};

use crate::Complex64;
use crate::setup::Estimator;

/// The largest length ≤ `n` whose only prime factors are 2, 3 and 5 (`n` itself when below 2):
/// an FFT of such a length is planned and run fast, where a length with a large prime factor
/// needs Bluestein's algorithm, several times slower to plan and to run.
pub fn smooth_len_at_most(n: usize) -> usize {
    if n < 2 {
        return n;
    }
    let mut best = 1;
    let mut p5 = 1usize;
    while p5 <= n {
        let mut p35 = p5;
        while p35 <= n {
            let mut m = p35;
            while m * 2 <= n {
                m *= 2;
            }
            best = best.max(m);
            p35 *= 3;
        }
        p5 *= 5;
    }
    best
}

/// A planned real FFT of one record length with its buffers, reused across hits.
pub struct SpectrumPlan {
    fft: Arc<dyn RealToComplex<f64>>,
    input: Vec<f64>,
    scratch: Vec<Complex64>,
    output: Vec<Complex64>,
}

impl SpectrumPlan {
    /// Plans a real FFT of length `n`.
    pub fn new(n: usize) -> Self {
        // One planner for the process: a length is planned once (about a millisecond for a
        // length of many factors), then every thread that needs it shares the plan.
        static PLANNER: std::sync::OnceLock<std::sync::Mutex<RealFftPlanner<f64>>> =
            std::sync::OnceLock::new();
        let fft = PLANNER
            .get_or_init(Default::default)
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
            .plan_fft_forward(n);
        Self {
            input: fft.make_input_vec(),
            scratch: fft.make_scratch_vec(),
            output: fft.make_output_vec(),
            fft,
        }
    }

    /// Record length.
    pub fn len(&self) -> usize {
        self.input.len()
    }

    /// True for a zero-length plan.
    pub fn is_empty(&self) -> bool {
        self.input.is_empty()
    }

    /// Spectrum lines `lines` of `x` (length n), scaled by `dt` (continuous-transform scaling).
    ///
    /// # Panics
    /// If `x` is not the planned length (a bug in the caller).
    pub fn lines(&mut self, x: &[f64], dt: f64, lines: std::ops::Range<usize>) -> Vec<Complex64> {
        assert_eq!(
            x.len(),
            self.input.len(),
            "record length differs from the plan"
        );
        self.lines_of(|buf| buf.copy_from_slice(x), dt, lines)
    }

    /// Like [`Self::lines`], but `fill` writes the record straight into the FFT's input buffer
    /// (it must write every sample).
    pub fn lines_of(
        &mut self,
        fill: impl FnOnce(&mut [f64]),
        dt: f64,
        lines: std::ops::Range<usize>,
    ) -> Vec<Complex64> {
        fill(&mut self.input);
        self.fft
            .process_with_scratch(&mut self.input, &mut self.output, &mut self.scratch)
            .expect("buffer sizes come from the plan");
        self.output[lines].iter().map(|c| c * dt).collect()
    }
}

/// Auto- and cross-spectra summed over hits: G_aa = Σ|A|², G_bb = Σ|B|², G_ab = Σ A*·B.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct CrossSpectra {
    /// Σ|A|² per line.
    pub gaa: Vec<f64>,
    /// Σ|B|² per line.
    pub gbb: Vec<f64>,
    /// Σ conj(A)·B per line.
    pub gab: Vec<Complex64>,
    /// Number of hits summed.
    pub count: usize,
}

impl CrossSpectra {
    /// Empty sums over `n` lines.
    pub fn new(n: usize) -> Self {
        Self {
            gaa: vec![0.0; n],
            gbb: vec![0.0; n],
            gab: vec![Complex64::new(0.0, 0.0); n],
            count: 0,
        }
    }

    /// Adds one hit's spectra.
    ///
    /// # Panics
    /// If the spectra differ in length from the sums.
    pub fn add(&mut self, a: &[Complex64], b: &[Complex64]) {
        assert!(a.len() == self.gaa.len() && b.len() == self.gaa.len());
        for i in 0..a.len() {
            self.gaa[i] += a[i].norm_sqr();
            self.gbb[i] += b[i].norm_sqr();
            self.gab[i] += a[i].conj() * b[i];
        }
        self.count += 1;
    }

    /// The FRF B/A by the chosen estimator.
    pub fn estimate(&self, est: Estimator) -> Vec<Complex64> {
        (0..self.gaa.len())
            .map(|i| estimate_line(est, self.gaa[i], self.gbb[i], self.gab[i]))
            .collect()
    }

    /// Ordinary coherence γ² = |G_ab|²/(G_aa·G_bb), in [0, 1]; 0 where a spectrum is empty.
    pub fn coherence(&self) -> Vec<f64> {
        (0..self.gaa.len())
            .map(|i| {
                let d = self.gaa[i] * self.gbb[i];
                if d > 0.0 {
                    (self.gab[i].norm_sqr() / d).min(1.0)
                } else {
                    0.0
                }
            })
            .collect()
    }

    /// Averages (sums divided by the count) of G_aa, G_bb and G_ab.
    pub fn averaged(&self) -> (Vec<f64>, Vec<f64>, Vec<Complex64>) {
        let k = 1.0 / self.count.max(1) as f64;
        (
            self.gaa.iter().map(|v| v * k).collect(),
            self.gbb.iter().map(|v| v * k).collect(),
            self.gab.iter().map(|v| v * k).collect(),
        )
    }
}

/// One spectral line of an estimator (Bendat & Piersol 2010; Hv the SISO total-least-squares line, derived).
pub fn estimate_line(est: Estimator, gaa: f64, gbb: f64, gab: Complex64) -> Complex64 {
    let zero = Complex64::new(0.0, 0.0);
    match est {
        Estimator::H1 => {
            if gaa > 0.0 {
                gab / gaa
            } else {
                zero
            }
        }
        Estimator::H2 => {
            if gab.norm_sqr() > 0.0 {
                gbb / gab.conj()
            } else {
                zero
            }
        }
        Estimator::Hv => {
            if gab.norm_sqr() > 0.0 {
                let d = gbb - gaa;
                (d + (d * d + 4.0 * gab.norm_sqr()).sqrt()) / (2.0 * gab.conj())
            } else {
                zero
            }
        }
    }
}

/// Mobility (m/s)/N from accelerance: A/(jω). Zero at ω = 0.
pub fn accelerance_to_mobility(a: Complex64, f_hz: f64) -> Complex64 {
    let w = 2.0 * std::f64::consts::PI * f_hz;
    if w == 0.0 {
        Complex64::new(0.0, 0.0)
    } else {
        a / Complex64::new(0.0, w)
    }
}

/// Receptance m/N from accelerance: −A/ω². Zero at ω = 0.
pub fn accelerance_to_receptance(a: Complex64, f_hz: f64) -> Complex64 {
    let w = 2.0 * std::f64::consts::PI * f_hz;
    if w == 0.0 {
        Complex64::new(0.0, 0.0)
    } else {
        -a / (w * w)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// 2·3·5-smooth lengths (common practice for FFT sizes): 1000 = 2³5³ stays, 1009 (prime)
    /// goes down to 1000, 65537 (prime) to 65536.
    #[test]
    fn smooth_lengths_are_the_largest_at_or_below() {
        assert_eq!(smooth_len_at_most(1000), 1000);
        assert_eq!(smooth_len_at_most(1009), 1000);
        assert_eq!(smooth_len_at_most(65537), 65536);
        assert_eq!(smooth_len_at_most(7), 6);
        assert_eq!(smooth_len_at_most(1), 1);
        for n in 2..3000usize {
            let m = smooth_len_at_most(n);
            let mut r = m;
            for p in [2, 3, 5] {
                while r.is_multiple_of(p) {
                    r /= p;
                }
            }
            assert!(
                r == 1 && m <= n && (n < 50 || m * 10 >= n * 9),
                "{n} -> {m}"
            );
        }
    }

    #[test]
    fn estimators_agree_without_noise_and_bracket_with_noise() {
        let h = Complex64::new(0.3, -1.2);
        let a = Complex64::new(2.0, 1.0);
        let (gaa, gbb, gab) = (a.norm_sqr(), (h * a).norm_sqr(), a.conj() * h * a);
        for e in [Estimator::H1, Estimator::H2, Estimator::Hv] {
            assert!((estimate_line(e, gaa, gbb, gab) - h).norm() < 1e-12);
        }
        // Extra response noise power: |H1| ≤ |Hv| ≤ |H2| (Bendat & Piersol 2010).
        let gbb_noisy = gbb + 0.5;
        let m = |e| estimate_line(e, gaa, gbb_noisy, gab).norm();
        assert!(m(Estimator::H1) <= m(Estimator::Hv) && m(Estimator::Hv) <= m(Estimator::H2));
    }

    #[test]
    fn unit_conversions() {
        // Receptance of a mass m: −1/(mω²); accelerance 1/m (Ewins 2000).
        let a = Complex64::new(0.5, 0.0);
        let f = 10.0;
        let w = 2.0 * std::f64::consts::PI * f;
        assert!((accelerance_to_receptance(a, f).re + 0.5 / (w * w)).abs() < 1e-15);
        assert!((accelerance_to_mobility(a, f).im + 0.5 / w).abs() < 1e-15);
    }
}

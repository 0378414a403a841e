//! Mode indicators over the band: where modes are, before any fit.

use super::*;

/// Mode indicators over the band.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Indicators {
    /// Lines, Hz.
    pub freq_hz: Vec<f64>,
    /// Σ_j |H_j| (hammer) — peaks at modes.
    pub sum_abs: Vec<f64>,
    /// MIF = 1 − Σ|Re H_j||H_j| / Σ|H_j|² (Williams, Crowley & Vold 1985, from memory) — dips at modes.
    pub mif: Vec<f64>,
    /// Σ_j G_bb,j: response auto-spectra (sensor layout: the modes' indicator; T's peaks are not modes).
    pub sum_response_autospectra: Vec<f64>,
}

/// Computes the indicators.
pub fn indicators(set: &FrfSet) -> Indicators {
    let nf = set.freq_hz.len();
    let mut ind = Indicators {
        freq_hz: set.freq_hz.clone(),
        sum_abs: vec![0.0; nf],
        mif: vec![0.0; nf],
        sum_response_autospectra: vec![0.0; nf],
    };
    for k in 0..nf {
        let (mut re_abs, mut sq) = (0.0, 0.0);
        for o in 0..set.h.len() {
            let h = set.h[o][k];
            ind.sum_abs[k] += h.norm();
            re_abs += h.re.abs() * h.norm();
            sq += h.norm_sqr();
            ind.sum_response_autospectra[k] += set.gbb[o][k];
        }
        ind.mif[k] = if sq > 0.0 { 1.0 - re_abs / sq } else { 0.0 };
    }
    ind
}

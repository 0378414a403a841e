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
    // Station by station along the lines (memory order); each line's sums still add the
    // stations in the same order.
    let mut re_abs = vec![0.0; nf];
    let mut sq = vec![0.0; nf];
    for (h, gbb) in set.h.iter().zip(&set.gbb) {
        for k in 0..nf {
            let hk = h[k];
            let n = hk.norm();
            ind.sum_abs[k] += n;
            re_abs[k] += hk.re.abs() * n;
            sq[k] += hk.norm_sqr();
            ind.sum_response_autospectra[k] += gbb[k];
        }
    }
    for k in 0..nf {
        ind.mif[k] = if sq[k] > 0.0 {
            1.0 - re_abs[k] / sq[k]
        } else {
            0.0
        };
    }
    ind
}

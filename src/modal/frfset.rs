//! The FRFs of a test, station by station on common lines, as the fit takes them.

use super::*;

/// The FRFs of a test, station by station on common lines.
#[derive(Debug, Clone, PartialEq)]
pub struct FrfSet {
    /// Layout.
    pub layout: Layout,
    /// Lines, Hz.
    pub freq_hz: Vec<f64>,
    /// Stations with an FRF.
    pub stations: Vec<u32>,
    /// Their positions, m.
    pub positions_m: Vec<f64>,
    /// FRF per station.
    pub h: Vec<Vec<Complex64>>,
    /// Coherence per station.
    pub coherence: Vec<Vec<f64>>,
    /// Hits averaged per station.
    pub hits: Vec<usize>,
    /// Averaged channel-A auto-spectrum per station.
    pub gaa: Vec<Vec<f64>>,
    /// Averaged channel-B auto-spectrum per station.
    pub gbb: Vec<Vec<f64>>,
    /// Exponential window time constant, s.
    pub exp_tau_s: f64,
    /// Index (into `stations`) of the reference station, when known.
    pub reference: Option<usize>,
    /// Line spacing, Hz.
    pub df_hz: f64,
    /// Per station, the upper edge of the force spectrum's usable band, Hz (∞ = the whole band;
    /// always ∞ in the roving-sensor layout). Lines above it count less in the fits.
    pub usable_hi_hz: Vec<f64>,
}

impl FrfSet {
    /// The same FRFs restricted to the lines inside `[lo, hi]` Hz.
    pub fn within(&self, [lo, hi]: [f64; 2]) -> Result<Self, String> {
        let k0 = self.freq_hz.partition_point(|&f| f < lo);
        let k1 = self.freq_hz.partition_point(|&f| f <= hi);
        if k1 <= k0 + 1 {
            return Err(format!(
                "the fit band {lo:.1}:{hi:.1} Hz holds fewer than two lines"
            ));
        }
        let cut = |v: &Vec<f64>| v[k0..k1].to_vec();
        Ok(Self {
            layout: self.layout,
            freq_hz: self.freq_hz[k0..k1].to_vec(),
            stations: self.stations.clone(),
            positions_m: self.positions_m.clone(),
            h: self.h.iter().map(|h| h[k0..k1].to_vec()).collect(),
            coherence: self.coherence.iter().map(cut).collect(),
            hits: self.hits.clone(),
            gaa: self.gaa.iter().map(cut).collect(),
            gbb: self.gbb.iter().map(cut).collect(),
            exp_tau_s: self.exp_tau_s,
            reference: self.reference,
            df_hz: self.df_hz,
            usable_hi_hz: self.usable_hi_hz.clone(),
        })
    }

    /// Gathers the stations of an analysis that have an FRF.
    pub fn from_analysis(a: &Analysis) -> Option<Self> {
        let with: Vec<_> = a
            .stations
            .iter()
            .filter(|s| s.result.frf.is_some())
            .collect();
        let first = with.first()?;
        let f0 = first.result.frf.as_ref()?;
        let mut set = FrfSet {
            layout: a.setup.layout,
            freq_hz: f0.freq_hz.clone(),
            stations: Vec::new(),
            positions_m: Vec::new(),
            h: Vec::new(),
            coherence: Vec::new(),
            hits: Vec::new(),
            gaa: Vec::new(),
            gbb: Vec::new(),
            exp_tau_s: first.result.exp_tau_s,
            reference: None,
            df_hz: first.result.df_hz,
            usable_hi_hz: Vec::new(),
        };
        // Copies of ~10 MB on a large test: spread over the cores.
        let copies = crate::numeric::par_map(&with, |s| {
            s.result.frf.as_ref().map(|f| {
                (
                    f.h.clone(),
                    f.coherence.clone(),
                    f.gaa.clone(),
                    f.gbb.clone(),
                )
            })
        });
        for (s, c) in with.iter().zip(copies) {
            let (h, coherence, gaa, gbb) = c?;
            let f = s.result.frf.as_ref()?;
            set.stations.push(s.station);
            set.positions_m.push(s.position_m);
            set.h.push(h);
            set.coherence.push(coherence);
            set.hits.push(f.hits_averaged);
            set.gaa.push(gaa);
            set.gbb.push(gbb);
            set.usable_hi_hz.push(
                s.result
                    .usable_band_hz
                    .map_or(f64::INFINITY, |b| b[1])
                    .max(0.0),
            );
        }
        set.reference = a
            .setup
            .reference_station
            .and_then(|r| set.stations.iter().position(|&s| s == r));
        Some(set)
    }

    /// Per-line weights 1/σ_H with σ_H² ≈ (1 − γ²)/(2nγ²)·|H|² (Bendat & Piersol 2010), or 1.
    /// Above a station's usable band the weight falls with the force amplitude: with noise on
    /// the response, σ_H grows as 1/|F| (H1), and the few hits' coherence cannot show it.
    pub(super) fn weights(&self, coherence: bool) -> Vec<Vec<f64>> {
        (0..self.h.len())
            .map(|o| {
                let hmax = self.h[o].iter().fold(0.0f64, |m, c| m.max(c.norm()));
                let n = self.hits[o].max(1) as f64;
                let edge = self.usable_hi_hz.get(o).copied().unwrap_or(f64::INFINITY);
                let k_edge = self.freq_hz.partition_point(|&f| f <= edge);
                let g_edge = (k_edge < self.freq_hz.len())
                    .then(|| self.gaa[o][k_edge.saturating_sub(1)])
                    .filter(|g| *g > 0.0);
                self.h[o]
                    .iter()
                    .zip(&self.coherence[o])
                    .enumerate()
                    .map(|(k, (h, &g))| {
                        let mag = h.norm().max(1e-6 * hmax).max(f64::MIN_POSITIVE);
                        let w = if coherence {
                            let g = g.clamp(1e-3, 1.0 - 1e-6);
                            (2.0 * n * g / (1.0 - g)).sqrt() / mag
                        } else {
                            1.0 / hmax.max(f64::MIN_POSITIVE)
                        };
                        match g_edge {
                            Some(ge) if k >= k_edge => w * (self.gaa[o][k] / ge).sqrt().min(1.0),
                            _ => w,
                        }
                    })
                    .collect()
            })
            .collect()
    }
}

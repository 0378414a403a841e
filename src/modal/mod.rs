//! Modal extraction: mode indicators, peak picking with quadrature sign, half-power damping, the
//! global LSCF fit with its stabilization diagram, automatic pole choice, LSFD residues and shapes.

use serde::{Deserialize, Serialize};

use crate::Complex64;
use crate::analysis::Analysis;
use crate::estimate::{autospectrum, circle, lscf, lsfd, refine, shape};
use crate::setup::Layout;
use crate::signal::window::correct_damping;
use lscf::{Pole, PoleStatus, StabilityCriteria, Stabilization};
use shape::{mac, mean_phase_deviation_deg, mpc, normalise};

mod fit;
mod frfset;
mod indicators;
mod local;
mod peak;
mod select;

use fit::fit_chosen;
pub use frfset::FrfSet;
pub use indicators::{Indicators, indicators};
use peak::peak_modes;
use select::lscf_modes;

pub(crate) const TAU_F: f64 = 2.0 * std::f64::consts::PI;

/// How modes are extracted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Method {
    /// Global LSCF poles + LSFD residues (roving-hammer layout).
    #[default]
    Lscf,
    /// Peaks of the mode indicator, quadrature shapes, half-power damping.
    Peak,
}

/// Which modes to report.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Selection {
    /// Every mode that passes the physical checks.
    #[default]
    Auto,
    /// The N best (most stable) modes.
    Count(usize),
    /// The modes nearest these frequencies, Hz.
    Near(Vec<f64>),
}

/// Where a damping value came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DampingSource {
    /// From the fitted pole.
    Pole,
    /// Half-power width of the accelerance indicator.
    HalfPower,
    /// Circle fit (Kennedy–Pancu) of the strongest station's mobility.
    CircleFit,
    /// Half-power width of the summed response auto-spectra (sensor layout; no force known).
    ResponseAutospectrum,
}

/// Settings of the modal stage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct ModalSettings {
    /// Method.
    pub method: Method,
    /// Which modes.
    pub selection: Selection,
    /// Highest LSCF model order.
    pub max_order: usize,
    /// Stability criteria.
    pub criteria: StabilityCriteria,
    /// Weight lines by 1/σ_H from coherence (Bendat & Piersol), else uniformly.
    pub coherence_weighting: bool,
    /// Fewest fully stable orders a physical mode needs.
    pub min_stable_orders: usize,
    /// Mains frequencies whose harmonics, when undamped, are hum and not modes.
    pub mains_hz: Vec<f64>,
    /// Refine each chosen pole by a local nonlinear fit (see `refine`).
    pub refine_poles: bool,
    /// Fit only the lines inside this band, Hz (`None`: the whole analysis band).
    pub band_hz: Option<[f64; 2]>,
}

impl Default for ModalSettings {
    fn default() -> Self {
        Self {
            method: Method::Lscf,
            selection: Selection::Auto,
            max_order: 64,
            criteria: StabilityCriteria::default(),
            coherence_weighting: true,
            min_stable_orders: 8,
            mains_hz: crate::signal::MAINS_HZ.to_vec(),
            refine_poles: true,
            band_hz: None,
        }
    }
}

impl ModalSettings {
    /// Checks every value against its range; returns a sentence naming the bad setting.
    pub fn validate(&self) -> Result<(), String> {
        if !(2..=200).contains(&self.max_order) {
            return Err(format!(
                "highest model order {} must be between 2 and 200",
                self.max_order
            ));
        }
        if self.min_stable_orders > self.max_order {
            return Err(format!(
                "fewest stable orders {} exceeds the highest order {}",
                self.min_stable_orders, self.max_order
            ));
        }
        let c = &self.criteria;
        for (name, v, hi) in [
            ("stability: frequency change", c.frequency, 1.0),
            ("stability: damping change", c.damping, 10.0),
            ("stability: MAC", c.mac, 1.0),
        ] {
            if !(v.is_finite() && v > 0.0 && v <= hi) {
                return Err(format!("{name} {v} must lie in (0, {hi}]"));
            }
        }
        if self.mains_hz.len() > 8
            || self
                .mains_hz
                .iter()
                .any(|f| !(f.is_finite() && *f > 0.0 && *f <= 1000.0))
        {
            return Err("mains frequencies: at most 8, each in (0, 1000] Hz".into());
        }
        if let Some([lo, hi]) = self.band_hz
            && !(lo.is_finite() && hi.is_finite() && lo >= 0.0 && hi > lo && hi <= 1e6)
        {
            return Err(format!(
                "fit band {lo}:{hi} Hz must satisfy 0 ≤ low < high ≤ 1e6"
            ));
        }
        match &self.selection {
            Selection::Count(n) if *n == 0 || *n > 200 => {
                Err(format!("mode count {n} must be between 1 and 200"))
            }
            Selection::Near(f)
                if f.len() > 200 || f.iter().any(|x| !(x.is_finite() && *x > 0.0)) =>
            {
                Err("modes near: at most 200 positive frequencies".into())
            }
            _ => Ok(()),
        }
    }
}

/// One mode.
#[derive(Debug, Clone, PartialEq)]
pub struct Mode {
    /// Natural frequency, Hz (exponential window removed).
    pub frequency_hz: f64,
    /// Damping ratio (exponential window removed); `None` where it is not known.
    pub damping_ratio: Option<f64>,
    /// Method.
    pub method: Method,
    /// Where the damping came from.
    pub damping_source: Option<DampingSource>,
    /// Modal phase collinearity of the complex shape.
    pub mpc: f64,
    /// Mean phase deviation, degrees.
    pub mpd_deg: f64,
    /// Shape over the stations: rotated to its principal axis, signed by the reference
    /// convention (reference station positive), largest magnitude 1.
    pub shape: Vec<Complex64>,
    /// Frequency as measured (window included), Hz.
    pub measured_frequency_hz: f64,
    /// Damping as measured (window included).
    pub measured_damping_ratio: Option<f64>,
    /// Orders over which the pole was fully stable (LSCF).
    pub stable_orders: usize,
    /// Damping by the half-power method (window removed), when it could be measured.
    pub damping_half_power: Option<f64>,
    /// Damping by circle fit of the strongest station's mobility (window removed).
    pub damping_circle_fit: Option<f64>,
    /// Notes for the reader.
    pub notes: Vec<String>,
}

/// All the modal stage produced.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ModalResult {
    /// Modes by frequency.
    pub modes: Vec<Mode>,
    /// The stabilization diagram (LSCF).
    pub stabilization: Option<Stabilization>,
    /// Indicators.
    pub indicators: Indicators,
    /// Stations of the shapes.
    pub stations: Vec<u32>,
    /// Positions, m.
    pub positions_m: Vec<f64>,
    /// Per-station LSFD fit error Σ|H − H_syn|²/Σ|H|².
    pub fit_error: Vec<f64>,
    /// Synthesized FRF per station (LSCF).
    pub synthesized: Vec<Vec<Complex64>>,
    /// MAC between every pair of modes.
    pub auto_mac: Vec<Vec<f64>>,
    /// Things the reader must know.
    pub warnings: Vec<String>,
    /// Time spent on the stabilization diagram, s (what a band-edge drag recomputes).
    pub stabilization_seconds: f64,
}

/// The FRFs inside the fit band (borrowed when there is none).
fn in_band(set: &FrfSet, band: Option<[f64; 2]>) -> Result<std::borrow::Cow<'_, FrfSet>, String> {
    Ok(match band {
        Some(b) => std::borrow::Cow::Owned(set.within(b)?),
        None => std::borrow::Cow::Borrowed(set),
    })
}

/// Extracts modes from a test's FRFs.
pub fn extract(set: &FrfSet, s: &ModalSettings) -> Result<ModalResult, String> {
    let banded = in_band(set, s.band_hz)?;
    let set = &*banded;
    let ind = indicators(set);
    let mut res = ModalResult {
        indicators: ind,
        stations: set.stations.clone(),
        positions_m: set.positions_m.clone(),
        ..ModalResult::default()
    };
    let method = if set.layout == Layout::Sensor {
        if s.method == Method::Lscf {
            res.warnings.push(
                "roving-sensor layout: transmissibility poles are the reference's antiresonances, so modes come \
                 from peaks of the summed response auto-spectra (peak method); no modal scaling"
                    .into(),
            );
        }
        Method::Peak
    } else {
        s.method
    };
    match method {
        Method::Peak => peak_modes(set, &mut res, s),
        Method::Lscf => lscf_modes(set, &mut res, s)?,
    }
    res.modes
        .sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    let edges: Vec<f64> = set
        .usable_hi_hz
        .iter()
        .copied()
        .filter(|e| e.is_finite())
        .collect();
    if let Some(edge) = crate::numeric::median(edges) {
        for m in res.modes.iter_mut().filter(|m| m.frequency_hz > edge) {
            m.notes.push(format!(
                "above the usable band of the force spectrum ({edge:.0} Hz, median over the \
                 stations): fitted with less weight; confirm with a harder tip"
            ));
        }
    }
    res.auto_mac = auto_mac(&res.modes);
    Ok(res)
}

/// MAC between every pair of modes.
fn auto_mac(modes: &[Mode]) -> Vec<Vec<f64>> {
    modes
        .iter()
        .map(|a| modes.iter().map(|b| mac(&a.shape, &b.shape)).collect())
        .collect()
}

/// Manual choice: modes from poles a person picked in the stabilization diagram (indices into
/// `stab.poles`), with residues, shapes and synthesized FRFs as for the automatic choice.
pub fn modes_from_poles(
    set: &FrfSet,
    s: &ModalSettings,
    stab: &Stabilization,
    picked: &[usize],
) -> Result<ModalResult, String> {
    let banded = in_band(set, s.band_hz)?;
    let set = &*banded;
    let mut res = ModalResult {
        indicators: indicators(set),
        stations: set.stations.clone(),
        positions_m: set.positions_m.clone(),
        ..ModalResult::default()
    };
    let mut chosen: Vec<(usize, usize)> = picked
        .iter()
        .filter(|&&i| i < stab.poles.len())
        .map(|&i| (i, 0))
        .collect();
    chosen.sort_by(|a, b| {
        stab.poles[a.0]
            .frequency_hz
            .total_cmp(&stab.poles[b.0].frequency_hz)
    });
    chosen.dedup_by_key(|c| c.0);
    let w = set.weights(s.coherence_weighting);
    fit_chosen(set, &mut res, stab, &w, &chosen, s.refine_poles)?;
    res.stabilization = Some(stab.clone());
    res.auto_mac = auto_mac(&res.modes);
    Ok(res)
}

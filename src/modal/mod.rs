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

const TAU_F: f64 = 2.0 * std::f64::consts::PI;

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
            mains_hz: vec![50.0, 60.0],
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
        for s in with {
            let f = s.result.frf.as_ref()?;
            set.stations.push(s.station);
            set.positions_m.push(s.position_m);
            set.h.push(f.h.clone());
            set.coherence.push(f.coherence.clone());
            set.hits.push(f.hits_averaged);
            set.gaa.push(f.gaa.clone());
            set.gbb.push(f.gbb.clone());
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
    fn weights(&self, coherence: bool) -> Vec<Vec<f64>> {
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

/// Local maxima of `y` standing at least 3 dB above the higher of their two flanking minima.
fn prominent_peaks(y: &[f64]) -> Vec<usize> {
    let n = y.len();
    let mut out = Vec::new();
    for i in 1..n.saturating_sub(1) {
        if !(y[i] > y[i - 1] && y[i] >= y[i + 1]) {
            continue;
        }
        let mut l = i;
        let mut lmin = y[i];
        while l > 0 && y[l - 1] <= y[i] {
            l -= 1;
            lmin = lmin.min(y[l]);
        }
        let mut r = i;
        let mut rmin = y[i];
        while r + 1 < n && y[r + 1] <= y[i] {
            r += 1;
            rmin = rmin.min(y[r]);
        }
        if y[i] >= std::f64::consts::SQRT_2 * lmin.max(rmin) {
            out.push(i);
        }
    }
    out
}

/// Parabolic interpolation of ln(y) around line i: (fractional offset, peak value).
fn interpolate_peak(y: &[f64], i: usize) -> (f64, f64) {
    if i == 0 || i + 1 >= y.len() || y[i - 1] <= 0.0 || y[i + 1] <= 0.0 {
        return (0.0, y[i]);
    }
    let (a, b, c) = (y[i - 1].ln(), y[i].ln(), y[i + 1].ln());
    let den = a - 2.0 * b + c;
    if den >= 0.0 {
        return (0.0, y[i]);
    }
    let d = 0.5 * (a - c) / den;
    (d, (b - 0.25 * (a - c) * d).exp())
}

/// Half-power width of the peak at line i of a magnitude-like `y` (`power`: y is already a
/// power, so its half-power level is y/2 rather than y/√2). Returns (f1, f2).
fn half_power(f: &[f64], y: &[f64], i: usize, peak: f64, power: bool) -> Option<(f64, f64)> {
    let level = if power {
        peak / 2.0
    } else {
        peak / std::f64::consts::SQRT_2
    };
    let mut l = i;
    while l > 0 && y[l] > level {
        l -= 1;
    }
    let mut r = i;
    while r + 1 < y.len() && y[r] > level {
        r += 1;
    }
    if y[l] > level || y[r] > level || l == i || r == i {
        return None;
    }
    let cross = |a: usize, b: usize| f[a] + (level - y[a]) * (f[b] - f[a]) / (y[b] - y[a]);
    Some((cross(l, l + 1), cross(r - 1, r)))
}

fn peak_modes(set: &FrfSet, res: &mut ModalResult, s: &ModalSettings) {
    let sensor = set.layout == Layout::Sensor;
    let y = if sensor {
        &res.indicators.sum_response_autospectra
    } else {
        &res.indicators.sum_abs
    };
    let f = &set.freq_hz;
    let mut peaks = prominent_peaks(y);
    // Rank by height for Count/Near selections.
    let mut chosen: Vec<usize> = match &s.selection {
        Selection::Auto => peaks.clone(),
        Selection::Count(n) => {
            peaks.sort_by(|a, b| y[*b].total_cmp(&y[*a]));
            peaks.into_iter().take(*n).collect()
        }
        Selection::Near(list) => list
            .iter()
            .filter_map(|&target| {
                peaks
                    .iter()
                    .copied()
                    .min_by(|a, b| (f[*a] - target).abs().total_cmp(&(f[*b] - target).abs()))
            })
            .collect(),
    };
    chosen.sort_unstable();
    chosen.dedup();
    for i in chosen {
        let (d, pk) = interpolate_peak(y, i);
        let mut fm = f[i] + d * set.df_hz;
        let mut zeta_m = half_power(f, y, i, pk, sensor).map(|(f1, f2)| (f2 - f1) / (2.0 * fm));
        // Roving sensor: the peak's whole line shape, not its half-power width (which needs
        // several lines inside the half-power band).
        if sensor
            && let Some(z0) = zeta_m
            && let Some((f_fit, z_fit)) = autospectrum::fit_peak(f, y, i, fm, z0)
        {
            fm = f_fit;
            zeta_m = Some(z_fit);
        }
        let (fc, zc) = match zeta_m {
            Some(z) => {
                let (fc, zc) = correct_damping(fm, z, set.exp_tau_s);
                (fc, Some(zc))
            }
            None => (fm, None),
        };
        let window_zeta = if set.exp_tau_s.is_finite() {
            1.0 / (set.exp_tau_s * 2.0 * std::f64::consts::PI * fm)
        } else {
            0.0
        };
        if is_hum(fc, zc.unwrap_or(0.0), window_zeta, set.df_hz, &s.mains_hz) {
            continue;
        }
        if sensor && zc.is_none() {
            res.warnings.push(format!(
                "a response peak at {fm:.2} Hz has no half-power points in the band; not reported as a mode"
            ));
            continue;
        }
        // A structural resonance is coherent at its peak; hum lines (random phase from hit to hit),
        // noise spikes and force-spectrum nulls are not.
        let coh = set.coherence.iter().map(|c| c[i]).sum::<f64>() / set.coherence.len() as f64;
        if !sensor && coh < 0.8 {
            continue;
        }
        let raw: Vec<Complex64> = set
            .h
            .iter()
            .map(|h| {
                if sensor {
                    // In-phase / out-of-phase sign of the transmissibility.
                    Complex64::new(h[i].norm() * h[i].re.signum(), 0.0)
                } else {
                    // Quadrature: signed Im(accelerance) at the peak (Ewins 2000).
                    Complex64::new(h[i].im, 0.0)
                }
            })
            .collect();
        let (hp_local, cf) = local_damping(set, fc);
        let (zc, source) = match (cf, zc) {
            (Some(c), _) if c > 0.0 => (Some(c), Some(DampingSource::CircleFit)),
            (_, Some(z)) => (
                Some(z),
                Some(if sensor {
                    DampingSource::ResponseAutospectrum
                } else {
                    DampingSource::HalfPower
                }),
            ),
            _ => (None, None),
        };
        let mut notes = vec![
            "peak picking: a single peak may hide two closely spaced modes (e.g. two bending planes); the lscf method resolves them"
                .to_string(),
        ];
        if zeta_m.is_none() {
            notes.push("half-power points not found inside the band: damping unknown".into());
        }
        if sensor {
            notes.push(
                "roving sensor: damping from the response auto-spectra; shapes are unscaled".into(),
            );
        }
        res.modes.push(Mode {
            frequency_hz: fc,
            damping_ratio: zc,
            method: Method::Peak,
            damping_source: source,
            mpc: mpc(&raw),
            mpd_deg: mean_phase_deviation_deg(&raw),
            shape: normalise(&raw, set.reference),
            measured_frequency_hz: fm,
            measured_damping_ratio: zeta_m,
            stable_orders: 0,
            damping_half_power: if sensor {
                zc.filter(|_| cf.is_none())
            } else {
                hp_local
            },
            damping_circle_fit: cf,
            notes,
        });
    }
}

/// Half-power and circle-fit damping of the resonance near `f_hz` (hammer layout), both with the
/// exponential window removed.
fn local_damping(set: &FrfSet, f_hz: f64) -> (Option<f64>, Option<f64>) {
    if set.layout == Layout::Sensor || set.freq_hz.len() < 8 {
        return (None, None);
    }
    let k = set
        .freq_hz
        .partition_point(|&x| x < f_hz)
        .clamp(1, set.freq_hz.len() - 2);
    // The strongest station at the resonance carries the best signal.
    let Some(o) =
        (0..set.h.len()).max_by(|&a, &b| set.h[a][k].norm().total_cmp(&set.h[b][k].norm()))
    else {
        return (None, None);
    };
    let mags: Vec<f64> = set.h[o].iter().map(|c| c.norm()).collect();
    let peak = (k.saturating_sub(2)..=(k + 2).min(mags.len() - 1))
        .max_by(|&a, &b| mags[a].total_cmp(&mags[b]))
        .unwrap_or(k);
    let (d, pk) = interpolate_peak(&mags, peak);
    let fm = set.freq_hz[peak] + d * set.df_hz;
    let hp =
        half_power(&set.freq_hz, &mags, peak, pk, false).map(|(f1, f2)| (f2 - f1) / (2.0 * fm));
    let half = hp.map_or(3, |z| {
        ((2.0 * z * fm / set.df_hz).round() as usize).clamp(3, 40)
    });
    let lo = peak.saturating_sub(half);
    let hi = (peak + half).min(set.freq_hz.len() - 1);
    let cf = circle::circle_fit(&set.freq_hz, &set.h[o], lo, hi);
    let corr = |f: f64, z: f64| correct_damping(f, z, set.exp_tau_s).1;
    (hp.map(|z| corr(fm, z)), cf.map(|(f, z)| corr(f, z)))
}

/// An undamped line at a mains harmonic: hum, not a mode. `window_zeta` is the damping the
/// exponential window alone gives a pure line; an estimate well below it is a line, not a mode.
fn is_hum(f: f64, zeta_true: f64, window_zeta: f64, df: f64, mains: &[f64]) -> bool {
    let tol = (0.5 * df).max(0.3);
    zeta_true < 3e-4f64.max(0.75 * window_zeta)
        && mains.iter().any(|&m| {
            let k = (f / m).round();
            k >= 1.0 && (f - k * m).abs() <= tol
        })
}

struct Cluster {
    members: Vec<usize>,
}

fn lscf_modes(set: &FrfSet, res: &mut ModalResult, s: &ModalSettings) -> Result<(), String> {
    let w = set.weights(s.coherence_weighting);
    let fit_order = s.max_order.min(set.freq_hz.len().saturating_sub(2) / 2);
    if fit_order < s.max_order {
        res.warnings.push(format!(
            "the band holds {} lines: model order limited to {fit_order} (asked {})",
            set.freq_hz.len(),
            s.max_order
        ));
    }
    if fit_order < 2 {
        res.warnings
            .push("the band is too narrow for a curve fit".into());
        return Ok(());
    }
    let t0 = std::time::Instant::now();
    let mut stab = lscf::stabilization(&set.freq_hz, &set.h, &w, fit_order, s.criteria)?;
    res.stabilization_seconds = t0.elapsed().as_secs_f64();
    let poles = &stab.poles;
    // Fully stable poles, clustered by frequency (gaps over 0.2 %), split where one order would
    // give two poles to a cluster (two close modes).
    let mut idx: Vec<usize> = (0..poles.len())
        .filter(|&i| poles[i].status == PoleStatus::FrequencyDampingShape)
        .collect();
    idx.sort_by(|&a, &b| poles[a].frequency_hz.total_cmp(&poles[b].frequency_hz));
    let mut clusters: Vec<Cluster> = Vec::new();
    for &i in &idx {
        match clusters.last_mut() {
            Some(c)
                if poles[i].frequency_hz
                    - poles[*c.members.last().expect("clusters are never empty")].frequency_hz
                    <= 0.002 * poles[i].frequency_hz =>
            {
                c.members.push(i)
            }
            _ => clusters.push(Cluster { members: vec![i] }),
        }
    }
    let mut split: Vec<Cluster> = Vec::new();
    while let Some(c) = clusters.pop() {
        let mut orders: Vec<usize> = c.members.iter().map(|&i| poles[i].order).collect();
        orders.sort_unstable();
        let dup = orders.windows(2).any(|w| w[0] == w[1]);
        if dup && c.members.len() >= 4 {
            let (g, _) = c
                .members
                .windows(2)
                .enumerate()
                .map(|(k, w)| (k, poles[w[1]].frequency_hz - poles[w[0]].frequency_hz))
                .fold((0, f64::MIN), |a, b| if b.1 > a.1 { b } else { a });
            let (l, r) = c.members.split_at(g + 1);
            clusters.push(Cluster {
                members: l.to_vec(),
            });
            clusters.push(Cluster {
                members: r.to_vec(),
            });
        } else {
            split.push(c);
        }
    }
    split.sort_by(|a, b| {
        poles[a.members[0]]
            .frequency_hz
            .total_cmp(&poles[b.members[0]].frequency_hz)
    });

    // Candidate modes: the median member of each cluster.
    struct Cand {
        pole: usize,
        size: usize,
    }
    let median = |c: &Cluster| {
        let mut m = c.members.clone();
        m.sort_by(|&a, &b| poles[a].frequency_hz.total_cmp(&poles[b].frequency_hz));
        m[m.len() / 2]
    };
    let mean_gaa: Vec<f64> = (0..set.freq_hz.len())
        .map(|k| set.gaa.iter().map(|g| g[k]).sum::<f64>() / set.gaa.len() as f64)
        .collect();
    let mut sorted_gaa = mean_gaa.clone();
    sorted_gaa.sort_by(f64::total_cmp);
    let gaa_median = sorted_gaa[sorted_gaa.len() / 2];
    let mean_coh: Vec<f64> = (0..set.freq_hz.len())
        .map(|k| set.coherence.iter().map(|c| c[k]).sum::<f64>() / set.coherence.len() as f64)
        .collect();
    let physical_pole = |pole: &Pole| {
        let (fc, zc) = correct_damping(pole.frequency_hz, pole.damping_ratio, set.exp_tau_s);
        let k = set
            .freq_hz
            .partition_point(|&x| x < fc)
            .min(set.freq_hz.len() - 1);
        zc > 1e-5
            && zc < 0.2
            && !is_hum(
                fc,
                zc,
                1.0 / (set.exp_tau_s * 2.0 * std::f64::consts::PI * fc),
                set.df_hz,
                &s.mains_hz,
            )
            // Away from force-spectrum nulls, where H is noise — unless the FRF is coherent
            // there all the same (a resonance past the null that the force still reaches).
            && (mean_gaa[k] > 0.01 * gaa_median || mean_coh[k] >= 0.9)
            && pole.mpc > 0.5
    };
    let physical = |p: usize| physical_pole(&poles[p]);
    let mut cands: Vec<Cand> = match &s.selection {
        // A physical pole stays to the highest orders; a pole that stood for two close modes at
        // low orders vanishes once the model resolves them.
        Selection::Auto => split
            .iter()
            .filter(|c| c.members.len() >= s.min_stable_orders)
            .filter(|c| {
                c.members
                    .iter()
                    .any(|&i| 4 * poles[i].order >= 3 * stab.max_order)
            })
            .map(|c| Cand {
                pole: median(c),
                size: c.members.len(),
            })
            .filter(|c| physical(c.pole))
            .collect(),
        Selection::Count(n) => {
            let mut v: Vec<Cand> = split
                .iter()
                .map(|c| Cand {
                    pole: median(c),
                    size: c.members.len(),
                })
                .filter(|c| physical(c.pole))
                .collect();
            // "Best": well-stabilised modes first (at least the minimum stable orders), and among
            // those the ones standing highest in the Σ|H| indicator.
            let height = |c: &Cand| {
                let f = poles[c.pole].frequency_hz;
                let k = set
                    .freq_hz
                    .partition_point(|&x| x < f)
                    .min(set.freq_hz.len() - 1);
                res.indicators.sum_abs[k]
            };
            v.sort_by(|a, b| {
                let (sa, sb) = (a.size >= s.min_stable_orders, b.size >= s.min_stable_orders);
                sb.cmp(&sa).then(height(b).total_cmp(&height(a)))
            });
            v.truncate(*n);
            v
        }
        Selection::Near(list) => list
            .iter()
            .filter_map(|&target| {
                split
                    .iter()
                    .min_by(|a, b| {
                        (poles[median(a)].frequency_hz - target)
                            .abs()
                            .total_cmp(&(poles[median(b)].frequency_hz - target).abs())
                    })
                    .map(|c| Cand {
                        pole: median(c),
                        size: c.members.len(),
                    })
            })
            .collect(),
    };
    cands.sort_by(|a, b| {
        poles[a.pole]
            .frequency_hz
            .total_cmp(&poles[b.pole].frequency_hz)
    });
    cands.dedup_by_key(|c| c.pole);
    let mut chosen: Vec<(usize, usize)> = cands.iter().map(|c| (c.pole, c.size)).collect();
    let t_local = std::time::Instant::now();
    if s.selection == Selection::Auto {
        // A pole the global fit gave to two close modes (a split pair from two bending planes,
        // widened by the exponential window) shows as two columns over a narrow band.
        let mut splits: Vec<(usize, Vec<(Pole, usize)>)> = Vec::new();
        for (ci, &(pi, _)) in chosen.iter().enumerate() {
            let f = poles[pi].frequency_hz;
            let near: Vec<(Pole, usize)> = local_columns(set, &w, f, s, &physical_pole)
                .into_iter()
                .filter(|c| (c.0.frequency_hz / f - 1.0).abs() < 0.015)
                .filter(|c| {
                    !chosen.iter().enumerate().any(|(cj, &(pj, _))| {
                        cj != ci && (poles[pj].frequency_hz / c.0.frequency_hz - 1.0).abs() < 0.003
                    })
                })
                .collect();
            if near.len() >= 2 {
                splits.push((ci, near));
            }
        }
        let found = local_poles(set, &res.indicators, &stab, &chosen, &w, s, &physical_pole);
        for (ci, near) in splits.into_iter().rev() {
            let f = stab.poles[chosen[ci].0].frequency_hz;
            chosen.remove(ci);
            let list: Vec<String> = near
                .iter()
                .map(|c| format!("{:.2}", c.0.frequency_hz))
                .collect();
            res.warnings.push(format!(
                "the pole at {f:.1} Hz of the fit over the whole band stood for {} close modes, \
                 resolved over a narrow band around it (measured {} Hz)",
                near.len(),
                list.join(", ")
            ));
            for (pole, size) in near {
                stab.poles.push(pole);
                chosen.push((stab.poles.len() - 1, size));
            }
        }
        for (pole, size) in found {
            res.warnings.push(format!(
                "a resonance at {:.1} Hz that the fit over the whole band did not resolve was \
                 fitted over a narrow band around it",
                pole.frequency_hz
            ));
            stab.poles.push(pole);
            chosen.push((stab.poles.len() - 1, size));
        }
        chosen.sort_by(|a, b| {
            stab.poles[a.0]
                .frequency_hz
                .total_cmp(&stab.poles[b.0].frequency_hz)
        });
    }
    if chosen.is_empty() {
        res.warnings
            .push("no stable physical pole was found in the band".into());
    }
    let t_fit = std::time::Instant::now();
    fit_chosen(set, res, &stab, &w, &chosen, s.refine_poles)?;
    if std::env::var_os("TAPGRID_TIMING").is_some() {
        eprintln!(
            "timing: modal local diagrams {:.3} s, refinement and residues {:.3} s",
            (t_fit - t_local).as_secs_f64(),
            t_fit.elapsed().as_secs_f64()
        );
    }
    if s.selection == Selection::Auto {
        // A stable pole whose shape is far from real and whose resonance peak is many times
        // broader than the pole says is not a mode of the part (noise or a leak between
        // stations); automatic choice drops it and says so. A person's choice is kept as made.
        let spurious: Vec<usize> = res
            .modes
            .iter()
            .enumerate()
            .filter(|(_, m)| {
                let z = m.damping_ratio.unwrap_or(0.0);
                m.mpc < 0.8 && m.damping_half_power.is_some_and(|hp| hp > 5.0 * z)
            })
            .map(|(i, _)| i)
            .collect();
        if !spurious.is_empty() {
            for &i in &spurious {
                let m = &res.modes[i];
                res.warnings.push(format!(
                    "a stable pole at {:.1} Hz was not reported as a mode: complex shape (MPC {:.2}) and a \
                     resonance peak {:.0}× broader than the pole; pick it by hand if it is real",
                    m.frequency_hz,
                    m.mpc,
                    m.damping_half_power.unwrap_or(0.0) / m.damping_ratio.unwrap_or(1.0).max(1e-12)
                ));
            }
            let kept: Vec<(usize, usize)> = chosen
                .iter()
                .enumerate()
                .filter(|(i, _)| !spurious.contains(i))
                .map(|(_, c)| *c)
                .collect();
            res.modes.clear();
            fit_chosen(set, res, &stab, &w, &kept, s.refine_poles)?;
        }
    }
    res.stabilization = Some(stab);
    Ok(())
}

/// The pole columns of a stabilization diagram over a narrow band around `f` (±15 % or ±40
/// lines): poles present at a steady frequency (within 0.3 %) through at least 60 % of the upper
/// half of the orders, with their damping spread within ±25 % and passing `physical`. Noise and
/// a nearby hum line make the damping jitter between orders at the low end of a wide band, so
/// frequency stability is what is asked; the local refinement then settles the damping against
/// the data. Each column is returned as its median pole with the number of orders it stood for,
/// by frequency.
fn local_columns(
    set: &FrfSet,
    w_all: &[Vec<f64>],
    f: f64,
    s: &ModalSettings,
    physical: &dyn Fn(&Pole) -> bool,
) -> Vec<(Pole, usize)> {
    let half = (0.15 * f).max(40.0 * set.df_hz);
    let k0 = set.freq_hz.partition_point(|&x| x < f - half);
    let k1 = set.freq_hz.partition_point(|&x| x <= f + half);
    if k1 < k0 + 24 {
        return Vec::new();
    }
    let h: Vec<Vec<Complex64>> = set.h.iter().map(|v| v[k0..k1].to_vec()).collect();
    let w: Vec<Vec<f64>> = w_all.iter().map(|v| v[k0..k1].to_vec()).collect();
    let order = 32.min((k1 - k0 - 2) / 2);
    let Ok(local) = lscf::stabilization(&set.freq_hz[k0..k1], &h, &w, order, s.criteria) else {
        return Vec::new();
    };
    let mut upper: Vec<&Pole> = local
        .poles
        .iter()
        .filter(|p| {
            p.status >= PoleStatus::Frequency
                && 2 * p.order >= local.max_order
                && (p.frequency_hz / f - 1.0).abs() < 0.02
        })
        .collect();
    upper.sort_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz));
    let orders_upper = local.max_order - local.max_order.div_ceil(2) + 1;
    let mut out = Vec::new();
    let mut start = 0;
    while start < upper.len() {
        let mut end = start + 1;
        while end < upper.len()
            && upper[end].frequency_hz / upper[end - 1].frequency_hz - 1.0 < 0.001
        {
            end += 1;
        }
        let mut column: Vec<&Pole> = upper[start..end].to_vec();
        start = end;
        // A broad pole that strays into the column (noise) is dropped by its damping; then one
        // pole per order, the one nearest the column's median damping.
        column.sort_by(|a, b| a.damping_ratio.total_cmp(&b.damping_ratio));
        let med = column[column.len() / 2].damping_ratio;
        column.retain(|p| p.damping_ratio > 0.5 * med && p.damping_ratio < 2.0 * med);
        column.sort_by(|a, b| {
            a.order.cmp(&b.order).then(
                (a.damping_ratio - med)
                    .abs()
                    .total_cmp(&(b.damping_ratio - med).abs()),
            )
        });
        column.dedup_by_key(|p| p.order);
        if column.is_empty() || 5 * column.len() < 3 * orders_upper {
            continue;
        }
        column.sort_by(|a, b| a.damping_ratio.total_cmp(&b.damping_ratio));
        let mid = column[column.len() / 2].damping_ratio;
        let (q1, q3) = (
            column[column.len() / 4].damping_ratio,
            column[3 * column.len() / 4].damping_ratio,
        );
        if !(q1 > 0.75 * mid && q3 < 1.25 * mid) {
            continue;
        }
        let pick = column[column.len() / 2].clone();
        if physical(&pick) {
            out.push((pick, column.len()));
        }
    }
    out.sort_by(|a, b| a.0.frequency_hz.total_cmp(&b.0.frequency_hz));
    out
}

/// Poles for prominent resonances of the Σ|H| indicator that no chosen pole explains, each from
/// a stabilization diagram over a narrow band around its peak. A band spanning decades leaves the
/// global z-domain fit ill-conditioned at its low end (poles crowd near z = 1), where a narrow
/// band resolves them; the same stability and physical checks apply, so a noise peak does not
/// pass. Returns each pole with the number of orders its column stood for.
fn local_poles(
    set: &FrfSet,
    ind: &Indicators,
    stab: &Stabilization,
    chosen: &[(usize, usize)],
    w: &[Vec<f64>],
    s: &ModalSettings,
    physical: &dyn Fn(&Pole) -> bool,
) -> Vec<(Pole, usize)> {
    let mut out: Vec<(Pole, usize)> = Vec::new();
    if set.layout != Layout::Hammer || set.freq_hz.len() < 64 {
        return out;
    }
    let y = &ind.sum_abs;
    for k in prominent_peaks(y) {
        let f = set.freq_hz[k];
        let near = |g: f64| (g - f).abs() <= (0.01 * f).max(3.0 * set.df_hz);
        if chosen.iter().any(|c| near(stab.poles[c.0].frequency_hz))
            || out.iter().any(|p| near(p.0.frequency_hz))
        {
            continue;
        }
        // A resonance stands at least 6 dB above the lowest point within ±10 % on each side.
        let span = ((0.1 * f / set.df_hz) as usize).max(4);
        let left = y[k.saturating_sub(span)..k]
            .iter()
            .fold(f64::INFINITY, |m, &v| m.min(v));
        let right = y[k + 1..(k + span + 1).min(y.len())]
            .iter()
            .fold(f64::INFINITY, |m, &v| m.min(v));
        if left.is_infinite() || right.is_infinite() || y[k] < 2.0 * left.max(right) {
            continue;
        }
        let cols = local_columns(set, w, f, s, physical);
        if let Some(best) = cols
            .into_iter()
            .filter(|c| (c.0.frequency_hz / f - 1.0).abs() < 0.01)
            .min_by(|a, b| {
                (a.0.frequency_hz - f)
                    .abs()
                    .total_cmp(&(b.0.frequency_hz - f).abs())
            })
        {
            out.push(best);
        }
    }
    out
}

/// LSFD residues, shapes and synthesized FRFs for chosen poles (index into `stab.poles`, and the
/// number of orders its cluster was stable over).
fn fit_chosen(
    set: &FrfSet,
    res: &mut ModalResult,
    stab: &Stabilization,
    w: &[Vec<f64>],
    chosen: &[(usize, usize)],
    refine: bool,
) -> Result<(), String> {
    let poles = &stab.poles;
    let mut lambdas: Vec<Complex64> = chosen.iter().map(|c| poles[c.0].lambda).collect();
    if refine {
        // Local weights: signal-to-noise from coherence, each station scaled by its largest |H|,
        // so that the fit near a peak follows the peak (no 1/|H| relative weighting there).
        let local: Vec<Vec<f64>> = set
            .h
            .iter()
            .zip(&set.coherence)
            .map(|(h, c)| {
                let top = h
                    .iter()
                    .fold(0.0f64, |m, v| m.max(v.norm()))
                    .max(f64::MIN_POSITIVE);
                c.iter()
                    .map(|&g| {
                        let g = g.clamp(1e-3, 1.0 - 1e-6);
                        (g / (1.0 - g)).sqrt() / top
                    })
                    .collect()
            })
            .collect();
        refine::refine_poles(&set.freq_hz, &set.h, &local, &mut lambdas, set.exp_tau_s);
    }
    let hs: Vec<&[Complex64]> = set.h.iter().map(Vec::as_slice).collect();
    let ws: Vec<&[f64]> = w.iter().map(Vec::as_slice).collect();
    let fits = lsfd::fit_outputs(&set.freq_hz, &hs, &ws, &lambdas, set.exp_tau_s)
        .map_err(|o| format!("station {}: the residue fit is singular", set.stations[o]))?;
    for (r, &(pi, size)) in chosen.iter().enumerate() {
        let pole = &poles[pi];
        let raw: Vec<Complex64> = local_residues(set, w, &lambdas, r)
            .unwrap_or_else(|| fits.iter().map(|f| f.residues[r]).collect());
        let (f_meas, z_meas) = (
            lambdas[r].norm() / TAU_F,
            -lambdas[r].re / lambdas[r].norm(),
        );
        let (fc, zc) = correct_damping(f_meas, z_meas, set.exp_tau_s);
        let close = chosen.iter().any(|&(o, _)| {
            o != pi && (poles[o].frequency_hz / pole.frequency_hz - 1.0).abs() < 0.02
        });
        let (hp, cf) = if close {
            (None, None)
        } else {
            local_damping(set, fc)
        };
        let mut notes = Vec::new();
        if close {
            notes.push("closely spaced pair: resolved by the global fit".to_string());
        }
        let m = mpc(&raw);
        if m < 0.9 {
            notes.push(format!(
                "complex shape (MPC {m:.2}): check for noise or a neighbouring mode"
            ));
        }
        res.modes.push(Mode {
            frequency_hz: fc,
            damping_ratio: Some(zc),
            method: Method::Lscf,
            damping_source: Some(DampingSource::Pole),
            mpc: m,
            mpd_deg: mean_phase_deviation_deg(&raw),
            shape: normalise(&raw, set.reference),
            measured_frequency_hz: f_meas,
            measured_damping_ratio: Some(z_meas),
            stable_orders: size,
            damping_half_power: hp,
            damping_circle_fit: cf,
            notes,
        });
    }
    res.fit_error = fits.iter().map(|f| f.fit_error).collect();
    res.synthesized = fits.into_iter().map(|f| f.synthesized).collect();
    Ok(())
}

/// Residues of pole `r` from an LSFD over a band around it (±10 % or ±30 lines, whichever is
/// wider), with the poles inside that band and local residuals. Over a wide band the global fit's
/// weights (1/σ_H from coherence) let the cleanest lines dominate, and a low mode's residue is
/// then decided by its faint tail far above it; near its own peak it is decided by its peak.
/// `None` when the band is too narrow for the fit or a station's fit is singular.
fn local_residues(
    set: &FrfSet,
    w: &[Vec<f64>],
    lambdas: &[Complex64],
    r: usize,
) -> Option<Vec<Complex64>> {
    let f = lambdas[r].norm() / TAU_F;
    let half = (0.1 * f).max(30.0 * set.df_hz);
    let (lo, hi) = (f - half, f + half);
    let k0 = set.freq_hz.partition_point(|&x| x < lo);
    let k1 = set.freq_hz.partition_point(|&x| x <= hi);
    let inside: Vec<usize> = (0..lambdas.len())
        .filter(|&q| {
            let g = lambdas[q].norm() / TAU_F;
            g >= lo && g <= hi
        })
        .collect();
    let at = inside.iter().position(|&q| q == r)?;
    let local: Vec<Complex64> = inside.iter().map(|&q| lambdas[q]).collect();
    if k1 < k0 + 4 * (2 * local.len() + 2) {
        return None;
    }
    let hs: Vec<&[Complex64]> = set.h.iter().map(|h| &h[k0..k1]).collect();
    let ws: Vec<&[f64]> = w.iter().map(|wo| &wo[k0..k1]).collect();
    lsfd::fit_outputs(&set.freq_hz[k0..k1], &hs, &ws, &local, set.exp_tau_s)
        .ok()
        .map(|fits| fits.iter().map(|fit| fit.residues[at]).collect())
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

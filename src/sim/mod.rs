//! The test simulator: tapgrid's own physics turned into WAV sets, with the truth they came from.
//!
//! A structure (any [`FrfModel`]: the beam model's modes, or an M–C–K system in tests) is excited
//! by half-sine hammer pulses. Each recording is synthesised in the frequency domain over the
//! whole file — `X(ω) = H(ω)·F(ω)` with the pulses' exact Fourier transforms — through a
//! zero-phase anti-alias filter flat to 0.45 fs. Then the audio chain: AC coupling (first-order
//! high-pass), mains hum coherent on both channels, noise, clipping at full scale and quantisation.

pub mod demo;
pub mod run;

use std::path::Path;

use realfft::RealFftPlanner;
use serde::{Deserialize, Serialize};

use crate::Complex64;
use crate::acquire::InputError;
use crate::acquire::wav::{SampleEncoding, write_channels};
use crate::atomic;
use crate::model::beam::{BeamTheory, Material, Section, Shaft, Support};
use crate::setup::Layout;

const TAU: f64 = 2.0 * std::f64::consts::PI;

/// Something with an accelerance between degrees of freedom.
pub trait FrfModel: Sync {
    /// Accelerance (m/s²)/N at DOF `response` for a force at DOF `force`, at ω rad/s.
    fn accelerance(&self, response: usize, force: usize, omega: f64) -> Complex64;
    /// The slowest modal decay rate ζω (1/s), which sets how long a record rings.
    fn slowest_decay_per_s(&self) -> f64;
}

/// A mode of the truth model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TruthMode {
    /// Undamped natural frequency, Hz.
    pub frequency_hz: f64,
    /// Viscous modal damping ratio.
    pub damping_ratio: f64,
    /// Mass-normalised shape at each DOF (station), 1/√kg.
    pub shape: Vec<f64>,
}

/// Modal superposition: A_ij(ω) = Σ_r −ω² φ_ir φ_jr / (ω_r² − ω² + 2jζ_r ω_r ω) (Ewins 2000).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModalModel {
    /// Modes.
    pub modes: Vec<TruthMode>,
}

impl FrfModel for ModalModel {
    fn accelerance(&self, i: usize, j: usize, w: f64) -> Complex64 {
        self.modes
            .iter()
            .map(|m| {
                let wr = TAU * m.frequency_hz;
                let den = Complex64::new(wr * wr - w * w, 2.0 * m.damping_ratio * wr * w);
                -w * w * m.shape[i] * m.shape[j] / den
            })
            .sum()
    }

    fn slowest_decay_per_s(&self) -> f64 {
        self.modes
            .iter()
            .map(|m| m.damping_ratio * TAU * m.frequency_hz)
            .fold(f64::INFINITY, f64::min)
    }
}

/// One hammer impact.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Impact {
    /// Start of the pulse, s from the file start.
    pub time_s: f64,
    /// Peak force, N.
    pub peak_n: f64,
    /// Half-sine duration, s.
    pub duration_s: f64,
    /// A second impact: (delay from the first pulse's start, s; amplitude ratio).
    pub second: Option<(f64, f64)>,
}

/// Fourier transform of a half-sine pulse P·sin(πt/Tc), 0 ≤ t ≤ Tc, at ω (rad/s):
/// P·(π/Tc)(1 + e^{−jωTc}) / ((π/Tc)² − ω²); −jPTc/2 at ω = π/Tc.
pub fn half_sine_ft(peak: f64, tc: f64, w: f64) -> Complex64 {
    let w0 = std::f64::consts::PI / tc;
    if (w - w0).abs() < 1e-9 * w0 {
        return Complex64::new(0.0, -peak * tc / 2.0);
    }
    let num = Complex64::new(1.0, 0.0) + Complex64::from_polar(1.0, -w * tc);
    num * (peak * w0 / (w0 * w0 - w * w))
}

/// The measurement chain between the structure and the WAV file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Rig {
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// WAV encoding.
    pub encoding: SampleEncoding,
    /// Volts at digital full scale.
    pub full_scale_volts: f64,
    /// Channel A sensitivity, mV per SI unit (the hammer in the hammer layout, the reference
    /// accelerometer in the sensor layout).
    pub sensitivity_a_mv: f64,
    /// Channel B sensitivity, mV per SI unit.
    pub sensitivity_b_mv: f64,
    /// AC-coupling corner (first-order high-pass), Hz; `None` = DC-coupled.
    pub ac_corner_hz: Option<f64>,
    /// Mains frequency, Hz.
    pub hum_hz: f64,
    /// Hum amplitude on both channels, V (the same wave on both: coherent).
    pub hum_volts: f64,
    /// Noise rms on channels A and B, V.
    pub noise_volts: [f64; 2],
}

impl Default for Rig {
    fn default() -> Self {
        Self {
            sample_rate_hz: 48_000,
            encoding: SampleEncoding::Int24,
            full_scale_volts: 1.0,
            sensitivity_a_mv: 2.25,
            sensitivity_b_mv: 1.02,
            ac_corner_hz: Some(4.0),
            hum_hz: 50.0,
            hum_volts: 2e-4,
            noise_volts: [3e-5, 3e-5],
        }
    }
}

impl Rig {
    /// The analysis setup that matches this rig: channels 0/1 with the rig's sensitivities and
    /// full scale, the given layout and band, everything else default.
    pub fn matching_setup(&self, layout: Layout, band_hz: [f64; 2]) -> crate::setup::Setup {
        use crate::setup::{Channel, Setup};
        use crate::units::Sensitivity;
        Setup {
            layout,
            channel_a: Channel {
                index: 0,
                sensitivity: Sensitivity::mv_per_unit(self.sensitivity_a_mv),
            },
            channel_b: Channel {
                index: 1,
                sensitivity: Sensitivity::mv_per_unit(self.sensitivity_b_mv),
            },
            full_scale_volts: self.full_scale_volts,
            band_hz: Some(band_hz),
            ..Setup::default()
        }
    }
}

/// A small deterministic random source (SplitMix64 and Box–Muller), stable across platforms.
#[derive(Debug, Clone)]
pub struct Rng(u64);

impl Rng {
    /// Seeded generator.
    pub fn new(seed: u64) -> Self {
        Self(seed ^ 0x9E37_79B9_7F4A_7C15)
    }
    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Standard normal.
    pub fn normal(&mut self) -> f64 {
        let u1 = self.uniform().max(1e-300);
        let u2 = self.uniform();
        (-2.0 * u1.ln()).sqrt() * (TAU * u2).cos()
    }
}

/// What is measured on the two channels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Pickup {
    /// Hammer layout: A = force, B = acceleration at `response` DOF.
    ForceAndResponse {
        /// Response DOF.
        response: usize,
    },
    /// Sensor layout: A = acceleration at `reference`, B = acceleration at `roving`.
    TwoResponses {
        /// Reference DOF.
        reference: usize,
        /// Roving DOF.
        roving: usize,
    },
}

/// Synthesises one recording of `duration_s`: impacts at DOF `force_dof`. Returns channels A and B
/// in full-scale units (clipped to ±1 as an interface would; quantisation happens on writing).
pub fn synthesize(
    model: &dyn FrfModel,
    pickup: Pickup,
    force_dof: usize,
    impacts: &[Impact],
    duration_s: f64,
    rig: &Rig,
    rng: &mut Rng,
) -> (Vec<f64>, Vec<f64>) {
    let fs = rig.sample_rate_hz as f64;
    let dt = 1.0 / fs;
    let len = (duration_s * fs).round() as usize;
    let sigma = model.slowest_decay_per_s().max(0.05);
    let pad = ((1e5f64.ln() / sigma).min(30.0) * fs) as usize;
    let m = (len + pad).next_power_of_two();
    let bins = m / 2 + 1;
    let mut fa = vec![Complex64::new(0.0, 0.0); bins];
    let mut fb = vec![Complex64::new(0.0, 0.0); bins];
    for k in 1..bins {
        let w = TAU * k as f64 * fs / m as f64;
        let mut f = Complex64::new(0.0, 0.0);
        for imp in impacts {
            f += half_sine_ft(imp.peak_n, imp.duration_s, w)
                * Complex64::from_polar(1.0, -w * imp.time_s);
            if let Some((delay, ratio)) = imp.second {
                f += half_sine_ft(imp.peak_n * ratio, imp.duration_s, w)
                    * Complex64::from_polar(1.0, -w * (imp.time_s + delay));
            }
        }
        let f = f / dt;
        let mut hp = match rig.ac_corner_hz {
            Some(fc) => {
                let jw = Complex64::new(0.0, w);
                jw / (jw + TAU * fc)
            }
            None => Complex64::new(1.0, 0.0),
        };
        // Anti-alias filter: flat to 0.45 fs, raised-cosine to zero at Nyquist, zero phase (a
        // linear-phase converter filter with its delay removed). A brick wall would make the
        // band-limited pulse pre-ring as 1/t for tenths of a second; this keeps it to a few ms.
        let f_rel = k as f64 / m as f64;
        if f_rel > 0.45 {
            hp *= 0.5 * (1.0 + (std::f64::consts::PI * (f_rel - 0.45) / 0.05).cos());
        }
        let (a, b) = match pickup {
            Pickup::ForceAndResponse { response } => {
                (f, model.accelerance(response, force_dof, w) * f)
            }
            Pickup::TwoResponses { reference, roving } => (
                model.accelerance(reference, force_dof, w) * f,
                model.accelerance(roving, force_dof, w) * f,
            ),
        };
        fa[k] = a * hp;
        fb[k] = b * hp;
    }
    fa[bins - 1].im = 0.0;
    fb[bins - 1].im = 0.0;
    let ifft = RealFftPlanner::<f64>::new().plan_fft_inverse(m);
    let to_time = |spec: &mut Vec<Complex64>, sens_mv: f64| -> Vec<f64> {
        let mut out = ifft.make_output_vec();
        let _ = ifft.process(spec, &mut out);
        let k = sens_mv * 1e-3 / m as f64;
        out.truncate(len);
        out.iter_mut().for_each(|v| *v *= k);
        out
    };
    let mut va = to_time(&mut fa, rig.sensitivity_a_mv);
    let mut vb = to_time(&mut fb, rig.sensitivity_b_mv);
    for (i, (a, b)) in va.iter_mut().zip(vb.iter_mut()).enumerate() {
        let t = i as f64 * dt;
        let hum = rig.hum_volts
            * ((TAU * rig.hum_hz * t).sin() + 0.3 * (TAU * 3.0 * rig.hum_hz * t + 0.4).sin());
        *a = ((*a + hum + rig.noise_volts[0] * rng.normal()) / rig.full_scale_volts)
            .clamp(-1.0, 1.0);
        *b = ((*b + hum + rig.noise_volts[1] * rng.normal()) / rig.full_scale_volts)
            .clamp(-1.0, 1.0);
    }
    (va, vb)
}

/// A whole simulated test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Scenario {
    /// Part name written into the truth file.
    pub part_name: String,
    /// Layout.
    pub layout: Layout,
    /// The shaft (its supports are the bench suspension).
    pub shaft: Shaft,
    /// Station positions, m; station numbers are 1, 2, ….
    pub stations_m: Vec<f64>,
    /// Station of the fixed accelerometer.
    pub reference_station: u32,
    /// Sensor layout: station struck by the hammer.
    pub drive_station: u32,
    /// Damping ratio of the flexible modes.
    pub damping_ratio: f64,
    /// Damping ratio of the suspension (rigid-body) modes.
    pub suspension_damping_ratio: f64,
    /// Measurement chain.
    pub rig: Rig,
    /// Hits per station.
    pub hits_per_station: usize,
    /// Mean time between hits, s.
    pub hit_interval_s: f64,
    /// Silence before the first hit, s.
    pub lead_s: f64,
    /// Peak force, N.
    pub force_n: f64,
    /// Pulse duration, s.
    pub pulse_s: f64,
    /// Random spread of force, duration and timing (fraction).
    pub jitter: f64,
    /// Hits to make double: (station, hit index).
    pub double_hits: Vec<(u32, usize)>,
    /// Hits to overload channel A: (station, hit index).
    pub overloads: Vec<(u32, usize)>,
    /// Hits struck weakly (4 % of channel A's full scale): (station, hit index).
    pub weak_hits: Vec<(u32, usize)>,
    /// Hits struck softly (a pulse five times longer, as with a glancing blow): (station, hit index).
    pub soft_hits: Vec<(u32, usize)>,
    /// A shaft that is not quite round: each flexible mode splits into two bending planes.
    pub second_plane: Option<SecondPlane>,
    /// Seed.
    pub seed: u64,
}

/// Two bending planes. The hammer and the accelerometer act along one direction at
/// `angle_deg` from the first principal plane, so the first plane's modes appear with
/// cos² of the angle and the second's (at frequencies raised by `split`) with sin².
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SecondPlane {
    /// Relative frequency split of the second plane's modes (0.01 = 1 % higher).
    pub split: f64,
    /// Angle of the measurement direction from the first principal plane, degrees.
    pub angle_deg: f64,
}

impl Default for Scenario {
    fn default() -> Self {
        Self::pump_shaft()
    }
}

impl Scenario {
    /// The demo: a small stepped pump shaft, 0.9 m, on soft cords in a repair shop (invented).
    pub fn pump_shaft() -> Self {
        let sec = |l, d| Section {
            length_m: l,
            outer_diameter_m: d,
            inner_diameter_m: 0.0,
            material: None,
        };
        let k_cord = 4.0e3; // N/m per cord: suspension modes of a few Hz
        Self {
            part_name: "PS-40 pump shaft (demo, simulated)".into(),
            layout: Layout::Hammer,
            shaft: Shaft {
                material: Material::STEEL,
                sections: vec![sec(0.15, 0.035), sec(0.60, 0.045), sec(0.15, 0.035)],
                discs: vec![],
                supports: vec![Support::lateral(0.2, k_cord), Support::lateral(0.7, k_cord)],
            },
            stations_m: (0..10).map(|i| i as f64 * 0.1).collect(),
            reference_station: 1,
            drive_station: 10,
            damping_ratio: 0.004,
            suspension_damping_ratio: 0.03,
            rig: Rig {
                encoding: SampleEncoding::Int16,
                ..Rig::default()
            },
            hits_per_station: 3,
            hit_interval_s: 1.7,
            lead_s: 0.4,
            force_n: 150.0,
            pulse_s: 2.5e-4,
            jitter: 0.1,
            double_hits: vec![],
            overloads: vec![],
            weak_hits: vec![],
            soft_hits: vec![],
            second_plane: None,
            seed: 1,
        }
    }

    /// The modal truth at the stations, from the Timoshenko model (modes below 0.45 fs).
    pub fn modal_model(&self) -> Result<ModalModel, String> {
        let (fe, modes) = self
            .shaft
            .modes(BeamTheory::Timoshenko, 40, 120, &self.stations_m)?;
        let nodes: Vec<usize> = self
            .stations_m
            .iter()
            .map(|&x| {
                fe.node_at(x)
                    .ok_or(format!("station at {x} m is outside the shaft"))
            })
            .collect::<Result<_, _>>()?;
        let fmax = 0.45 * self.rig.sample_rate_hz as f64;
        let mut out = Vec::new();
        for (i, m) in modes.iter().enumerate() {
            if m.frequency_hz > fmax {
                break;
            }
            let suspension = i < 2 && m.frequency_hz < 50.0;
            let shape: Vec<f64> = nodes.iter().map(|&n| m.displacement[n]).collect();
            let damping_ratio = if suspension {
                self.suspension_damping_ratio
            } else {
                self.damping_ratio
            };
            match self.second_plane {
                Some(sp) if !suspension => {
                    let (s, c) = sp.angle_deg.to_radians().sin_cos();
                    out.push(TruthMode {
                        frequency_hz: m.frequency_hz,
                        damping_ratio,
                        shape: shape.iter().map(|v| v * c).collect(),
                    });
                    if m.frequency_hz * (1.0 + sp.split) <= fmax {
                        out.push(TruthMode {
                            frequency_hz: m.frequency_hz * (1.0 + sp.split),
                            damping_ratio,
                            shape: shape.iter().map(|v| v * s).collect(),
                        });
                    }
                }
                _ => out.push(TruthMode {
                    frequency_hz: m.frequency_hz,
                    damping_ratio,
                    shape,
                }),
            }
        }
        Ok(ModalModel { modes: out })
    }

    fn station_index(&self, st: u32) -> Result<usize, String> {
        let i = st as usize;
        if i >= 1 && i <= self.stations_m.len() {
            Ok(i - 1)
        } else {
            Err(format!(
                "station {st} is not among stations 1–{}",
                self.stations_m.len()
            ))
        }
    }

    /// The usual demo rig for a layout: a 2.25 mV/N hammer and 1.02 mV/(m/s²) (10 mV/g)
    /// accelerometers; in the sensor layout both channels are accelerometers.
    pub fn set_layout(&mut self, layout: Layout) {
        self.layout = layout;
        self.rig.sensitivity_a_mv = match layout {
            Layout::Hammer => 2.25,
            Layout::Sensor => 1.02,
        };
    }

    /// Checks every value against a physical range before any recording is sized from it.
    pub fn validate(&self) -> Result<(), String> {
        let num = |name: &str, v: f64, lo: f64, hi: f64| -> Result<(), String> {
            if v.is_finite() && (lo..=hi).contains(&v) {
                Ok(())
            } else {
                Err(format!("{name} {v} is out of range: give {lo} to {hi}"))
            }
        };
        self.shaft.validate()?;
        if !(2..=1000).contains(&self.stations_m.len()) {
            return Err(format!(
                "{} stations: give 2 to 1000",
                self.stations_m.len()
            ));
        }
        let l = self.shaft.length_m();
        for x in &self.stations_m {
            num("station position (m)", *x, 0.0, l)?;
        }
        if !(1..=1000).contains(&self.hits_per_station) {
            return Err(format!(
                "{} hits per station: give 1 to 1000",
                self.hits_per_station
            ));
        }
        if !(1000..=1_000_000).contains(&self.rig.sample_rate_hz) {
            return Err(format!(
                "sample rate {} Hz: give 1000 to 1000000 Hz",
                self.rig.sample_rate_hz
            ));
        }
        num("damping ratio", self.damping_ratio, 1e-6, 0.5)?;
        num(
            "suspension damping ratio",
            self.suspension_damping_ratio,
            0.0,
            1.0,
        )?;
        num("hit interval (s)", self.hit_interval_s, 0.01, 600.0)?;
        num("lead-in (s)", self.lead_s, 0.0, 600.0)?;
        num("force (N)", self.force_n, 1e-6, 1e6)?;
        num("pulse length (s)", self.pulse_s, 1e-6, 0.05)?;
        num("timing jitter", self.jitter, 0.0, 1.0)?;
        num("full-scale volts", self.rig.full_scale_volts, 1e-6, 1e4)?;
        num("sensitivity A (mV)", self.rig.sensitivity_a_mv, 1e-9, 1e9)?;
        num("sensitivity B (mV)", self.rig.sensitivity_b_mv, 1e-9, 1e9)?;
        num("hum frequency (Hz)", self.rig.hum_hz, 0.0, 1e5)?;
        num("hum (V)", self.rig.hum_volts, 0.0, 1e4)?;
        for v in self.rig.noise_volts {
            num("noise (V)", v, 0.0, 1e4)?;
        }
        if let Some(c) = self.rig.ac_corner_hz {
            num("AC-coupling corner (Hz)", c, 1e-4, 1000.0)?;
        }
        let seconds = self.lead_s + self.hits_per_station as f64 * self.hit_interval_s;
        let frames = seconds * self.rig.sample_rate_hz as f64;
        if frames > 2e8 {
            return Err(format!(
                "each station's recording would hold {frames:.3e} frames ({seconds:.0} s): at \
                 most 2e8"
            ));
        }
        Ok(())
    }

    /// Writes the WAV set (`station-NN.wav`, `stations.csv`) and `truth.json` into `dir`.
    pub fn write(&self, dir: &Path) -> Result<Truth, InputError> {
        self.validate().map_err(|m| InputError::new(dir, m))?;
        let model = self.modal_model().map_err(|m| InputError::new(dir, m))?;
        std::fs::create_dir_all(dir)
            .map_err(|e| InputError::new(dir, format!("cannot create folder: {e}")))?;
        let reference = self
            .station_index(self.reference_station)
            .map_err(|m| InputError::new(dir, m))?;
        let drive = self
            .station_index(self.drive_station)
            .map_err(|m| InputError::new(dir, m))?;
        let mut rng = Rng::new(self.seed);
        let mut hits = Vec::new();
        let duration = self.lead_s + self.hits_per_station as f64 * self.hit_interval_s;
        let full_scale_n = self.rig.full_scale_volts / (self.rig.sensitivity_a_mv * 1e-3);
        for (j, _) in self.stations_m.iter().enumerate() {
            let st = j as u32 + 1;
            let mut impacts = Vec::new();
            for h in 0..self.hits_per_station {
                let jit = |r: &mut Rng| 1.0 + self.jitter * (2.0 * r.uniform() - 1.0);
                let double = self.double_hits.contains(&(st, h));
                let overload = self.overloads.contains(&(st, h));
                let weak = self.weak_hits.contains(&(st, h));
                let soft = self.soft_hits.contains(&(st, h));
                let imp = Impact {
                    time_s: self.lead_s
                        + h as f64 * self.hit_interval_s
                        + 0.05 * self.jitter * rng.uniform(),
                    peak_n: if overload {
                        1.6 * full_scale_n
                    } else if weak {
                        0.04 * full_scale_n
                    } else {
                        self.force_n * jit(&mut rng)
                    },
                    duration_s: self.pulse_s
                        * (1.0 + 0.5 * (jit(&mut rng) - 1.0))
                        * if soft { 5.0 } else { 1.0 },
                    second: double.then_some((2.0e-3, 0.3)),
                };
                hits.push(TruthHit {
                    station: st,
                    index: h,
                    impact: imp,
                    double_hit: double,
                    overload,
                    weak,
                    soft,
                });
                impacts.push(imp);
            }
            let (pickup, force_dof) = match self.layout {
                Layout::Hammer => (
                    Pickup::ForceAndResponse {
                        response: reference,
                    },
                    j,
                ),
                Layout::Sensor => (
                    Pickup::TwoResponses {
                        reference,
                        roving: j,
                    },
                    drive,
                ),
            };
            let (a, b) = synthesize(
                &model, pickup, force_dof, &impacts, duration, &self.rig, &mut rng,
            );
            let path = dir.join(format!("station-{st:02}.wav"));
            write_channels(&path, self.rig.sample_rate_hz, self.rig.encoding, &[&a, &b])?;
        }
        let mut csv = String::from("station,position_m\n");
        for (j, x) in self.stations_m.iter().enumerate() {
            csv.push_str(&format!("{},{}\n", j + 1, x));
        }
        let p = dir.join("stations.csv");
        atomic::write_bytes(&p, csv.as_bytes())
            .map_err(|e| InputError::new(&p, format!("cannot write: {e}")))?;
        let truth = Truth {
            scenario: self.clone(),
            modes: model
                .modes
                .iter()
                .map(|m| {
                    let big = m
                        .shape
                        .iter()
                        .fold(0.0f64, |a, v| if v.abs() > a.abs() { *v } else { a });
                    TruthModeOut {
                        frequency_hz: m.frequency_hz,
                        damping_ratio: m.damping_ratio,
                        shape_mass_normalised: m.shape.clone(),
                        shape_unit: m.shape.iter().map(|v| v / big).collect(),
                    }
                })
                .collect(),
            hits,
        };
        let p = dir.join("truth.json");
        let text =
            serde_json::to_string_pretty(&truth).map_err(|e| InputError::new(&p, e.to_string()))?;
        atomic::write_bytes(&p, text.as_bytes())
            .map_err(|e| InputError::new(&p, format!("cannot write: {e}")))?;
        Ok(truth)
    }
}

/// A simulated hit as it was made.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TruthHit {
    /// Station.
    pub station: u32,
    /// Index within the station's recording.
    pub index: usize,
    /// The impact.
    pub impact: Impact,
    /// Made double.
    pub double_hit: bool,
    /// Made to overload.
    pub overload: bool,
    /// Struck weakly.
    #[serde(default)]
    pub weak: bool,
    /// Struck softly (long pulse).
    #[serde(default)]
    pub soft: bool,
}

/// A truth mode as written to `truth.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TruthModeOut {
    /// Undamped natural frequency, Hz.
    pub frequency_hz: f64,
    /// Damping ratio.
    pub damping_ratio: f64,
    /// Mass-normalised shape at the stations, 1/√kg.
    pub shape_mass_normalised: Vec<f64>,
    /// Shape scaled so its largest entry is +1.
    pub shape_unit: Vec<f64>,
}

/// `truth.json`: what the simulated test was made from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    /// The scenario.
    pub scenario: Scenario,
    /// Modes below 0.45 fs.
    pub modes: Vec<TruthModeOut>,
    /// Every hit.
    pub hits: Vec<TruthHit>,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn half_sine_transform_matches_numerical_integral() {
        // Direct trapezoidal integral of P sin(πt/Tc) e^{−jωt}, an independent check.
        let (p, tc) = (100.0, 1e-3);
        for w in [0.0, 1000.0, std::f64::consts::PI / tc, 9000.0] {
            let n = 20000;
            let mut acc = Complex64::new(0.0, 0.0);
            for i in 0..=n {
                let t = tc * i as f64 / n as f64;
                let wt = if i == 0 || i == n { 0.5 } else { 1.0 };
                acc +=
                    Complex64::from_polar(p * (std::f64::consts::PI * t / tc).sin() * wt, -w * t);
            }
            acc *= tc / n as f64;
            assert!(
                (half_sine_ft(p, tc, w) - acc).norm() < 1e-6 * acc.norm().max(1e-3),
                "w={w}"
            );
        }
    }
}

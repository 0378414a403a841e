//! The options of every command, as clap parses them, and the parsers of their values.

use super::*;

/// `tapgrid bench-decode`.
#[derive(Debug, Args)]
pub struct BenchDecodeArgs {
    /// A WAV set or session folder.
    pub input: PathBuf,
}

/// `tapgrid bench-verdict`.
#[derive(Debug, Args)]
pub struct BenchVerdictArgs {
    /// A session folder with a shaft model.
    pub input: PathBuf,
    /// Repetitions (the median is printed).
    #[arg(long, default_value_t = 5)]
    pub repeat: usize,
}

/// Layout choice on the command line.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum LayoutArg {
    /// Roving hammer, fixed accelerometer.
    Hammer,
    /// Roving accelerometer against a fixed reference accelerometer.
    Sensor,
}

impl From<LayoutArg> for Layout {
    fn from(l: LayoutArg) -> Self {
        match l {
            LayoutArg::Hammer => Layout::Hammer,
            LayoutArg::Sensor => Layout::Sensor,
        }
    }
}

/// Estimator choice.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum EstimatorArg {
    /// H1 = G_ab/G_aa.
    H1,
    /// H2 = G_bb/G_ba.
    H2,
    /// Hv, total least squares.
    Hv,
}

/// Trigger slope.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum SlopeArg {
    /// Rising through +level.
    Rising,
    /// Falling through −level.
    Falling,
}

/// WAV encoding for the simulator.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum EncodingArg {
    /// 16-bit integer.
    Int16,
    /// 24-bit integer.
    Int24,
    /// 32-bit integer.
    Int32,
    /// 32-bit float.
    Float32,
}

impl From<EncodingArg> for SampleEncoding {
    fn from(e: EncodingArg) -> Self {
        match e {
            EncodingArg::Int16 => SampleEncoding::Int16,
            EncodingArg::Int24 => SampleEncoding::Int24,
            EncodingArg::Int32 => SampleEncoding::Int32,
            EncodingArg::Float32 => SampleEncoding::Float32,
        }
    }
}

/// Setup options shared by `analyze` and `import`; each overrides the session's or the default.
#[derive(Debug, Args, Default)]
pub struct SetupArgs {
    /// Test layout.
    #[arg(long, value_enum)]
    pub layout: Option<LayoutArg>,
    /// Channel indices A,B (0-based): A = force or reference, B = response.
    #[arg(long, value_name = "A,B")]
    pub channels: Option<String>,
    /// Sensitivities A,B in mV per unit, optionally with units: 2.25mV/N,100mV/g.
    #[arg(long, value_name = "A,B")]
    pub sensitivity: Option<String>,
    /// Volts at digital full scale.
    #[arg(long, value_name = "V")]
    pub full_scale_volts: Option<f64>,
    /// Analysis band in Hz.
    #[arg(long, value_name = "LO:HI")]
    pub band: Option<String>,
    /// Record length, s (default: the next power of two ≥ 1 s of samples).
    #[arg(long, value_name = "SECONDS")]
    pub record_length: Option<f64>,
    /// Fraction of the record before the trigger.
    #[arg(long, value_name = "FRACTION")]
    pub pretrigger: Option<f64>,
    /// FRF estimator.
    #[arg(long, value_enum)]
    pub estimator: Option<EstimatorArg>,
    /// Trigger level as a fraction of full scale (default 0.02).
    #[arg(long, value_name = "FRACTION", conflicts_with = "trigger_noise")]
    pub trigger_level: Option<f64>,
    /// Trigger level as a multiple of channel A's noise rms.
    #[arg(long, value_name = "K")]
    pub trigger_noise: Option<f64>,
    /// Trigger slope.
    #[arg(long, value_enum)]
    pub slope: Option<SlopeArg>,
    /// Dead time after a trigger, s (default: the post-trigger record).
    #[arg(long, value_name = "SECONDS")]
    pub holdoff: Option<f64>,
    /// Unity length of the force window, s (default: 4 × detected pulse width).
    #[arg(long, value_name = "SECONDS")]
    pub force_window: Option<f64>,
    /// Cosine taper each side of the force window, s (default: one pulse width).
    #[arg(long, value_name = "SECONDS")]
    pub force_taper: Option<f64>,
    /// Exponential window value at the record end (1 = no exponential window).
    #[arg(long, value_name = "FRACTION")]
    pub exp_end: Option<f64>,
    /// Station spacing in m, when there is no stations.csv.
    #[arg(long, value_name = "METRES")]
    pub spacing: Option<f64>,
    /// Station of the fixed (reference) accelerometer.
    #[arg(long, value_name = "STATION")]
    pub reference: Option<u32>,
    /// Leave ringing carried over from earlier hits in the records (default: model and remove it).
    #[arg(long)]
    pub keep_carryover: bool,
    /// AC-coupling corner to undo (hammer layout): auto (from the hammer's tail), none, or Hz.
    #[arg(long, value_name = "auto|none|HZ")]
    pub ac_corner: Option<String>,
}

pub(super) fn pair<T: std::str::FromStr>(text: &str, what: &str) -> Result<(T, T)> {
    let mut it = text.split(',').map(str::trim);
    match (it.next(), it.next(), it.next()) {
        (Some(a), Some(b), None) => Ok((
            a.parse()
                .map_err(|_| anyhow!("--{what}: cannot read {a:?}"))?,
            b.parse()
                .map_err(|_| anyhow!("--{what}: cannot read {b:?}"))?,
        )),
        _ => bail!("--{what} takes two values separated by a comma, got {text:?}"),
    }
}

impl SetupArgs {
    /// Applies the given options on top of `base`.
    pub fn apply(&self, mut s: Setup) -> Result<Setup> {
        if let Some(l) = self.layout {
            s.layout = l.into();
        }
        if let Some(c) = &self.channels {
            let (a, b) = pair::<usize>(c, "channels")?;
            s.channel_a.index = a;
            s.channel_b.index = b;
        }
        if let Some(t) = &self.sensitivity {
            let (a, b): (String, String) = pair(t, "sensitivity")?;
            let sa = Sensitivity::parse(&a).map_err(|e| anyhow!("--sensitivity A: {e}"))?;
            let sb = Sensitivity::parse(&b).map_err(|e| anyhow!("--sensitivity B: {e}"))?;
            sa.check_quantity(&a, s.layout.channel_a_quantity())
                .map_err(|e| anyhow!("--sensitivity A: {e}"))?;
            sb.check_quantity(&b, crate::units::Quantity::Acceleration)
                .map_err(|e| anyhow!("--sensitivity B: {e}"))?;
            s.channel_a.sensitivity = sa;
            s.channel_b.sensitivity = sb;
        }
        if let Some(v) = self.full_scale_volts {
            s.full_scale_volts = v;
        }
        if let Some(b) = &self.band {
            let (lo, hi) = b
                .split_once(':')
                .ok_or_else(|| anyhow!("--band takes LO:HI in Hz, got {b:?}"))?;
            let p = |x: &str| {
                x.trim()
                    .parse::<f64>()
                    .map_err(|_| anyhow!("--band: cannot read {x:?}"))
            };
            s.band_hz = Some([p(lo)?, p(hi)?]);
        }
        if let Some(r) = self.record_length {
            s.trigger.record_length_s = Some(r);
        }
        if let Some(p) = self.pretrigger {
            s.trigger.pretrigger_fraction = p;
        }
        if let Some(e) = self.estimator {
            s.estimator = match e {
                EstimatorArg::H1 => Estimator::H1,
                EstimatorArg::H2 => Estimator::H2,
                EstimatorArg::Hv => Estimator::Hv,
            };
        }
        if let Some(f) = self.trigger_level {
            s.trigger.level = TriggerLevel::FractionOfRange(f);
        }
        if let Some(k) = self.trigger_noise {
            s.trigger.level = TriggerLevel::NoiseMultiple(k);
        }
        if let Some(sl) = self.slope {
            s.trigger.slope = match sl {
                SlopeArg::Rising => Slope::Rising,
                SlopeArg::Falling => Slope::Falling,
            };
        }
        if let Some(h) = self.holdoff {
            s.trigger.holdoff_s = Some(h);
        }
        if let Some(w) = self.force_window {
            s.windows.force_unity_s = Some(w);
        }
        if let Some(w) = self.force_taper {
            s.windows.force_taper_s = Some(w);
        }
        if let Some(e) = self.exp_end {
            s.windows.exponential_end = e;
        }
        if let Some(sp) = self.spacing {
            s.spacing_m = sp;
        }
        if let Some(r) = self.reference {
            s.reference_station = Some(r);
        }
        if self.keep_carryover {
            s.remove_carryover = false;
        }
        if let Some(c) = &self.ac_corner {
            s.ac_coupling = match c.trim() {
                "auto" => crate::setup::AcCoupling::Auto,
                "none" => crate::setup::AcCoupling::None,
                t => crate::setup::AcCoupling::CornerHz(
                    t.parse::<f64>()
                        .ok()
                        .filter(|v| v.is_finite() && *v > 0.0)
                        .ok_or_else(|| {
                            anyhow!("--ac-corner takes auto, none or a corner in Hz, got {t:?}")
                        })?,
                ),
            };
        }
        s.validate().map_err(|m| anyhow!("bad setup: {m}"))?;
        Ok(s)
    }
}

/// `tapgrid analyze`.
#[derive(Debug, Args)]
pub struct AnalyzeArgs {
    /// A WAV set folder or a session folder.
    pub input: PathBuf,
    /// Output folder for frf.csv, result.json and stabilization.csv.
    #[arg(long)]
    pub out: PathBuf,
    /// Modal stage.
    #[command(flatten)]
    pub modal: ModalArgs,
    /// Setup.
    #[command(flatten)]
    pub setup: SetupArgs,
}

/// Options of the modal stage (`analyze`, `report`). Each one not given comes from the session's
/// saved fit (its method, band and mode choice), else from the defaults.
#[derive(Debug, Args, Default)]
pub struct ModalArgs {
    /// Modes to report: auto, a count N (the N most stable), frequencies F1,F2,… (Hz), or none
    /// (FRFs only) [default: the session's saved choice, else auto].
    #[arg(long)]
    pub modes: Option<String>,
    /// Extraction method [default: lscf].
    #[arg(long, value_enum)]
    pub method: Option<MethodArg>,
    /// Highest LSCF model order [default: 64].
    #[arg(long)]
    pub max_order: Option<usize>,
    /// Stability: largest relative frequency change between orders [default: 0.01].
    #[arg(long)]
    pub stable_frequency: Option<f64>,
    /// Stability: largest relative damping change between orders [default: 0.05].
    #[arg(long)]
    pub stable_damping: Option<f64>,
    /// Stability: smallest MAC between the shapes of successive orders [default: 0.98].
    #[arg(long)]
    pub stable_mac: Option<f64>,
}

/// `tapgrid report`.
#[derive(Debug, Args)]
pub struct ReportArgs {
    /// A WAV set folder or a session folder.
    pub input: PathBuf,
    /// The file to write: HTML, or PDF when it ends in .pdf.
    #[arg(long)]
    pub out: PathBuf,
    /// Also write the report as PDF to this file.
    #[arg(long)]
    pub pdf: Option<PathBuf>,
    /// The shaft model (JSON), or a session holding one (default: the input's own model, if any).
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Part name shown in the title (default: the session's part, else the folder's name).
    #[arg(long)]
    pub part: Option<String>,
    /// A run-up or coast-down recording (tach on channel 0, vibration on 1) to report beside
    /// the session's own runs; repeatable.
    #[arg(long)]
    pub run: Vec<PathBuf>,
    /// Vibration sensor sensitivity of the `--run` recordings, mV per m/s².
    #[arg(long)]
    pub run_sensitivity: Option<f64>,
    /// Modal stage.
    #[command(flatten)]
    pub modal: ModalArgs,
    /// Setup.
    #[command(flatten)]
    pub setup: SetupArgs,
}

/// Modal method.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum MethodArg {
    /// Global LSCF fit with stabilization diagram and LSFD residues.
    Lscf,
    /// Peak picking with quadrature shapes and half-power damping.
    Peak,
}

/// The modal settings: `base` (a session's saved fit, or the defaults) with the options given;
/// `None` for `--modes none`.
pub(super) fn modal_settings(a: &ModalArgs, base: ModalSettings) -> Result<Option<ModalSettings>> {
    let mut m = base;
    if let Some(t) = a.modes.as_deref().map(str::trim) {
        m.selection = match t {
            "none" => return Ok(None),
            "auto" => Selection::Auto,
            t if !t.contains(',') && !t.contains('.') && t.parse::<usize>().is_ok() => {
                Selection::Count(t.parse()?)
            }
            t => Selection::Near(
                t.split(',')
                    .filter(|x| !x.trim().is_empty())
                    .map(|x| {
                        x.trim().parse::<f64>().map_err(|_| {
                            anyhow!("--modes: cannot read {x:?}; use auto, N or F1,F2,…")
                        })
                    })
                    .collect::<Result<_>>()?,
            ),
        };
    }
    if let Some(method) = a.method {
        m.method = match method {
            MethodArg::Lscf => Method::Lscf,
            MethodArg::Peak => Method::Peak,
        };
    }
    if let Some(p) = a.max_order {
        m.max_order = p;
    }
    if !(2..=200).contains(&m.max_order) {
        bail!("--max-order must be between 2 and 200");
    }
    if let Some(v) = a.stable_frequency {
        m.criteria.frequency = v;
    }
    if let Some(v) = a.stable_damping {
        m.criteria.damping = v;
    }
    if let Some(v) = a.stable_mac {
        m.criteria.mac = v;
    }
    m.validate().map_err(|e| anyhow!("modal settings: {e}"))?;
    Ok(Some(m))
}

/// `tapgrid import`.
#[derive(Debug, Args)]
pub struct ImportArgs {
    /// The WAV set folder.
    pub wavset: PathBuf,
    /// New session folder.
    #[arg(long)]
    pub session: PathBuf,
    /// Part name.
    #[arg(long, default_value = "")]
    pub part: String,
    /// Setup.
    #[command(flatten)]
    pub setup: SetupArgs,
}

/// `tapgrid capture`.
#[derive(Debug, Args)]
pub struct CaptureArgs {
    /// Input device id as `tapgrid devices` lists it (e.g. `alsa:hw:1,0`), or `generator` for a
    /// built-in synthetic source paced at the sample rate.
    #[arg(long)]
    pub device: String,
    /// Session folder (created if new, added to if it exists).
    #[arg(long)]
    pub session: PathBuf,
    /// Station to tap.
    #[arg(long)]
    pub station: u32,
    /// Accepted hits wanted.
    #[arg(long, default_value_t = 3)]
    pub hits: usize,
    /// Station position, m (default: station × spacing).
    #[arg(long)]
    pub position: Option<f64>,
    /// Sample rate, Hz (default: the device's).
    #[arg(long)]
    pub rate: Option<u32>,
    /// Frames per audio callback (default: the host's).
    #[arg(long)]
    pub buffer: Option<u32>,
    /// Part name for a new session.
    #[arg(long, default_value = "")]
    pub part: String,
    /// Stop with an error when no samples arrive for this many seconds.
    #[arg(long, default_value_t = 3.0)]
    pub stall: f64,
    /// Setup for a new session (an existing session keeps its own).
    #[command(flatten)]
    pub setup: SetupArgs,
}

/// `tapgrid model`.
#[derive(Debug, Args)]
pub struct ModelArgs {
    /// The shaft model (JSON: material, sections, discs, supports), or a session holding one.
    pub shaft: PathBuf,
    /// Output folder for modes.json.
    #[arg(long, required_unless_present = "into")]
    pub out: Option<PathBuf>,
    /// Also save the shaft in this session (its bearings and running speed are kept).
    #[arg(long)]
    pub into: Option<PathBuf>,
    /// Modes to compute (rigid-body modes of a free part included).
    #[arg(long, default_value_t = 6)]
    pub modes: usize,
    /// stations.csv (station,position_m): shapes also at these positions.
    #[arg(long)]
    pub stations: Option<PathBuf>,
    /// Also sweep every support's stiffness over LO:HI N/m (log, 25 points) → stiffness_map.csv.
    #[arg(long)]
    pub stiffness_map: Option<String>,
}

/// `tapgrid plan`.
#[derive(Debug, Args)]
pub struct PlanArgs {
    /// The shaft model (JSON) or a session holding one; or give --length and --diameter.
    pub shaft: Option<PathBuf>,
    /// Band of interest, LO:HI Hz.
    #[arg(long)]
    pub band: String,
    /// Stations you mean to use (default: the plan proposes a count).
    #[arg(long)]
    pub stations: Option<usize>,
    /// Damping ratio expected of the part's modes (a bare steel shaft: 0.0005–0.005).
    #[arg(long, default_value_t = 0.002)]
    pub damping: f64,
    /// A uniform part instead of a model file: length, m.
    #[arg(long, conflicts_with = "shaft")]
    pub length: Option<f64>,
    /// A uniform part: outer diameter, m.
    #[arg(long, requires = "length")]
    pub diameter: Option<f64>,
    /// A uniform part: bore, m (0: solid).
    #[arg(long, default_value_t = 0.0)]
    pub bore: f64,
    /// A uniform part: material.
    #[arg(long, value_enum, default_value_t = MaterialArg::Steel)]
    pub material: MaterialArg,
    /// Sample rate of the recording, Hz.
    #[arg(long, default_value_t = 51_200.0)]
    pub rate: f64,
    /// Keep the reference farther than this fraction of the length from any in-band node.
    #[arg(long, default_value_t = 0.05)]
    pub node_fraction: f64,
    /// Also write DIR/plan.json.
    #[arg(long)]
    pub out: Option<PathBuf>,
}

/// Material of a uniform part.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum MaterialArg {
    /// Structural steel, 210 GPa, 7850 kg/m³.
    Steel,
    /// Aluminium alloy, 70 GPa, 2700 kg/m³.
    Aluminium,
}

/// `tapgrid report-details`.
#[derive(Debug, Args)]
pub struct ReportDetailsArgs {
    /// The session.
    pub session: PathBuf,
    /// Who did the test.
    #[arg(long)]
    pub operator: Option<String>,
    /// Who reviews it.
    #[arg(long)]
    pub reviewer: Option<String>,
    /// Where.
    #[arg(long)]
    pub site: Option<String>,
    /// When (free text).
    #[arg(long)]
    pub date: Option<String>,
    /// How the part was held.
    #[arg(long)]
    pub support: Option<String>,
    /// Signal conditioning.
    #[arg(long)]
    pub conditioning: Option<String>,
    /// An instrument: ROLE|MODEL|SERIAL|CALIBRATED|SENSITIVITY (fields may be empty);
    /// repeatable, added to those kept.
    #[arg(long)]
    pub instrument: Vec<String>,
    /// Forget the instruments kept before adding these.
    #[arg(long)]
    pub clear_instruments: bool,
}

/// `tapgrid compare`.
#[derive(Debug, Args)]
pub struct CompareArgs {
    /// The first test (session or WAV set): before, or part A.
    pub first: PathBuf,
    /// The second test: after, or part B.
    pub second: PathBuf,
    /// Smallest MAC that pairs two modes.
    #[arg(long, default_value_t = 0.6)]
    pub min_mac: f64,
    /// Also write DIR/compare.json.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Setup for WAV sets (a session uses its own).
    #[command(flatten)]
    pub setup: SetupArgs,
}

/// `tapgrid check`.
#[derive(Debug, Args)]
pub struct CheckArgs {
    /// A session or WAV set folder (analysed and fitted automatically).
    pub input: PathBuf,
    /// A second test of the same part with the reference at another station (reciprocity).
    #[arg(long)]
    pub second: Option<PathBuf>,
    /// Reference station of the second test (default: its own setup's).
    #[arg(long)]
    pub second_reference: Option<u32>,
    /// The shaft model (JSON, or a session holding one) for the mass line (default: the
    /// input's own model).
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Also write DIR/checks.json.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Setup for a WAV set (a session uses its own); set --reference for the driving point.
    #[command(flatten)]
    pub setup: SetupArgs,
}

/// `tapgrid correlate`.
#[derive(Debug, Args)]
pub struct CorrelateArgs {
    /// A session or WAV set folder (analysed and fitted automatically).
    pub input: PathBuf,
    /// The shaft model (JSON), or a session holding one (default: the input's own model).
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Output folder for correlation.json.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Smallest MAC that pairs two modes.
    #[arg(long, default_value_t = 0.6)]
    pub min_mac: f64,
    /// Setup for a WAV set (a session uses its own).
    #[command(flatten)]
    pub setup: SetupArgs,
}

/// `tapgrid margin`.
#[derive(Debug, Args)]
pub struct MarginArgs {
    /// Operating speed range, rpm (MIN:MAX); default: the model session's running speed.
    #[arg(long)]
    pub speed: Option<String>,
    /// Resonances as F or F:ZETA (Hz, damping ratio), comma-separated.
    #[arg(long)]
    pub modes: Option<String>,
    /// A session or WAV set: its measured modes (frequency and damping).
    #[arg(long)]
    pub test: Option<PathBuf>,
    /// A shaft model (JSON, or a session holding one): its critical speeds on its bearings in
    /// service, else on its supports (undamped: AF unknown).
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Orders of running speed (default: the model study's, else 1,2).
    #[arg(long)]
    pub orders: Option<String>,
    /// AF below which no margin is required (default: the model study's rule, else 2.5).
    #[arg(long)]
    pub af_threshold: Option<f64>,
    /// Cap of the margin below the range, % (default: the model study's rule, else 16).
    #[arg(long)]
    pub below_cap: Option<f64>,
    /// Cap of the margin above the range, % (default: the model study's rule, else 26).
    #[arg(long)]
    pub above_cap: Option<f64>,
    /// Setup options for `--test` (on top of a session's own).
    #[command(flatten)]
    pub setup: SetupArgs,
}

/// `tapgrid calibrate`.
#[derive(Debug, Args)]
pub struct CalibrateArgs {
    /// What to compute.
    #[command(subcommand)]
    pub what: CalibrateWhat,
}

/// Calibration helpers.
#[derive(Debug, Subcommand)]
#[allow(clippy::large_enum_variant)] // parsed once
pub enum CalibrateWhat {
    /// Sensitivity of an accelerometer channel from a reference shaker recording.
    Sensitivity {
        /// Recording (WAV).
        wav: PathBuf,
        /// Channel index.
        #[arg(long, default_value_t = 0)]
        channel: usize,
        /// Reference frequency, Hz.
        #[arg(long, default_value_t = 159.2)]
        frequency: f64,
        /// Reference level, m/s² rms.
        #[arg(long, default_value_t = 10.0)]
        rms: f64,
        /// Volts at digital full scale.
        #[arg(long, default_value_t = 1.0)]
        full_scale_volts: f64,
    },
    /// Volts at digital full scale from a known sine voltage into the input.
    FullScale {
        /// Recording (WAV).
        wav: PathBuf,
        /// Channel index.
        #[arg(long, default_value_t = 0)]
        channel: usize,
        /// Sine frequency, Hz.
        #[arg(long)]
        frequency: f64,
        /// Sine level, V rms.
        #[arg(long)]
        volts_rms: f64,
    },
    /// Mass check: taps on a freely suspended known mass; accelerance should be 1/m.
    Mass {
        /// Recording of the taps (WAV).
        wav: PathBuf,
        /// The mass, kg.
        #[arg(long)]
        mass_kg: f64,
        /// Setup (channels, sensitivities, band…).
        #[command(flatten)]
        setup: SetupArgs,
    },
    /// Loopback: one signal into both inputs; |H| should be 1, phase 0.
    Loopback {
        /// Recording (WAV).
        wav: PathBuf,
        /// Channel indices A,B.
        #[arg(long, default_value = "0,1")]
        channels: String,
    },
}

/// Verdict to set.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum VerdictArg {
    /// Keep the hit whatever the checks say.
    Accept,
    /// Leave the hit out whatever the checks say.
    Reject,
    /// Back to the automatic verdict.
    Auto,
}

/// `tapgrid verdict`.
#[derive(Debug, Args)]
pub struct VerdictArgs {
    /// Session folder.
    pub session: PathBuf,
    /// Station.
    #[arg(long)]
    pub station: u32,
    /// Hit number in the station's recording, counted from 1 — as the window, the summary and
    /// the report number hits.
    #[arg(long)]
    pub hit: usize,
    /// The verdict.
    #[arg(long = "set", value_enum)]
    pub verdict: VerdictArg,
}

/// `tapgrid simulate`.
#[derive(Debug, Args)]
pub struct SimulateArgs {
    /// Output folder (WAV set + truth.json).
    #[arg(long)]
    pub out: PathBuf,
    /// A scenario JSON file (see `sim::Scenario`); flags below override it.
    #[arg(long)]
    pub scenario: Option<PathBuf>,
    /// Simulate a run-up or coast-down instead (tach on channel 0, accelerometer on 1): a run
    /// scenario JSON file (`sim::run::RunScenario`), or `default` → DIR/run.wav, DIR/truth.json.
    #[arg(long, value_name = "FILE|default")]
    pub run: Option<String>,
    /// Layout.
    #[arg(long, value_enum)]
    pub layout: Option<LayoutArg>,
    /// Number of stations, evenly spread end to end.
    #[arg(long)]
    pub stations: Option<usize>,
    /// Hits per station.
    #[arg(long)]
    pub hits: Option<usize>,
    /// Sample rate, Hz.
    #[arg(long)]
    pub fs: Option<u32>,
    /// WAV encoding.
    #[arg(long, value_enum)]
    pub encoding: Option<EncodingArg>,
    /// Damping ratio of the flexible modes.
    #[arg(long)]
    pub damping: Option<f64>,
    /// Make a hit double: STATION:HIT (repeatable).
    #[arg(long, value_name = "STATION:HIT")]
    pub double_hit: Vec<String>,
    /// Make a hit overload channel A: STATION:HIT (repeatable).
    #[arg(long, value_name = "STATION:HIT")]
    pub overload: Vec<String>,
    /// Make a hit weak (4 % of full scale): STATION:HIT (repeatable).
    #[arg(long, value_name = "STATION:HIT")]
    pub weak: Vec<String>,
    /// Make a hit soft (a pulse five times longer): STATION:HIT (repeatable).
    #[arg(long, value_name = "STATION:HIT")]
    pub soft: Vec<String>,
    /// Hammer pulse duration (half-sine), s: 1.5/duration is the force spectrum's first null.
    #[arg(long, value_name = "SECONDS")]
    pub pulse: Option<f64>,
    /// Two bending planes: each flexible mode split by SPLIT (0.01 = 1 %), measured at ANGLE
    /// degrees from the first plane.
    #[arg(long, value_name = "SPLIT:ANGLE")]
    pub second_plane: Option<String>,
    /// Noise rms on both channels, V.
    #[arg(long)]
    pub noise: Option<f64>,
    /// Mains hum amplitude on both channels, V.
    #[arg(long)]
    pub hum: Option<f64>,
    /// Mean time between hits, s.
    #[arg(long)]
    pub interval: Option<f64>,
    /// Random seed.
    #[arg(long)]
    pub seed: Option<u64>,
}

pub(super) fn tapgrid_second_plane(split: f64, angle_deg: f64) -> crate::sim::SecondPlane {
    crate::sim::SecondPlane { split, angle_deg }
}

pub(super) fn station_hit(s: &str) -> Result<(u32, usize)> {
    let (a, b) = s
        .split_once(':')
        .ok_or_else(|| anyhow!("expected STATION:HIT, got {s:?}"))?;
    // People count hits from 1; the simulator's scenario stores the 0-based index.
    let hit: usize = b.trim().parse()?;
    let index = hit
        .checked_sub(1)
        .ok_or_else(|| anyhow!("{s:?}: hits are counted from 1"))?;
    Ok((a.trim().parse()?, index))
}

/// `tapgrid demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Output folder (default: a folder in the system temp dir).
    #[arg(long)]
    pub out: Option<PathBuf>,
}

/// `tapgrid bearing`.
#[derive(Debug, Args)]
pub struct BearingArgs {
    /// The kind of bearing.
    #[command(subcommand)]
    pub kind: BearingKind,
}

/// Bearing kinds.
#[derive(Debug, Subcommand)]
pub enum BearingKind {
    /// A plain (full, cylindrical) journal bearing from its geometry and operating point.
    Plain(PlainArgs),
    /// A two-lobe (elliptical) journal bearing: finite-difference film; --clearance-m is the
    /// lobes' machined clearance.
    TwoLobe(TwoLobeArgs),
}

/// `tapgrid bearing two-lobe`.
#[derive(Debug, Args)]
pub struct TwoLobeArgs {
    /// Geometry and operating point (as for `plain`; the method is always finite).
    #[command(flatten)]
    pub bearing: PlainArgs,
    /// Preload m = 1 − (set clearance)/(lobe clearance).
    #[arg(long)]
    pub preload: f64,
    /// Arc of each of the two axial grooves at the split, degrees.
    #[arg(long, default_value_t = 20.0)]
    pub groove_deg: f64,
}

/// Film solution for a plain bearing.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FilmArg {
    /// Short-bearing closed form (Ocvirk).
    Short,
    /// Finite-difference Reynolds equation with cavitation.
    Finite,
}

/// `tapgrid bearing plain`.
#[derive(Debug, Args)]
pub struct PlainArgs {
    /// Journal diameter, m.
    #[arg(long)]
    pub diameter_m: f64,
    /// Bearing length, m.
    #[arg(long)]
    pub length_m: f64,
    /// Radial clearance, m.
    #[arg(long)]
    pub clearance_m: f64,
    /// Lubricant dynamic viscosity, Pa·s.
    #[arg(long)]
    pub viscosity_pa_s: f64,
    /// Static load on the bearing, N.
    #[arg(long)]
    pub load_n: f64,
    /// Spin speed, rpm.
    #[arg(long)]
    pub speed_rpm: f64,
    /// Film solution.
    #[arg(long, value_enum, default_value_t = FilmArg::Short)]
    pub method: FilmArg,
}

/// `tapgrid rotor`.
#[derive(Debug, Args)]
pub struct RotorArgs {
    /// The rotor file (shaft JSON plus bearings, unbalances; see README).
    pub rotor: PathBuf,
    /// Output folder for campbell.json and unbalance.csv.
    #[arg(long)]
    pub out: PathBuf,
    /// Speed sweep LO:HI:COUNT, rpm [default: 0 to 2.5 × the top of the operating range (or
    /// 10000), 101 speeds].
    #[arg(long)]
    pub speeds: Option<String>,
    /// Whirl modes to track (forward and backward count separately).
    #[arg(long, default_value_t = 8)]
    pub modes: usize,
    /// Elements over the shaft's length (nodes are added at sections, discs and bearings).
    #[arg(long, default_value_t = 40)]
    pub elements: usize,
}

/// Quantity of the tracked amplitudes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum QuantityArg {
    /// As recorded (an accelerometer: m/s²).
    Acceleration,
    /// Integrated once (m/s).
    Velocity,
    /// Integrated twice (m).
    Displacement,
}

/// `tapgrid record-run`.
#[derive(Debug, Args)]
pub struct RecordRunArgs {
    /// Input device id as `tapgrid devices` lists it, or `generator` for a synthetic 64 s
    /// coast-down paced at the sample rate.
    #[arg(long)]
    pub device: String,
    /// A session folder (the run goes to its runs/ folder and into its manifest), another
    /// folder (a new run-….wav in it) or a new .wav file.
    #[arg(long)]
    pub out: PathBuf,
    /// Device input carrying the tach (0-based); it is channel 0 of the file.
    #[arg(long, default_value_t = 0)]
    pub tach_input: usize,
    /// Device input carrying the vibration sensor; it is channel 1 of the file.
    #[arg(long, default_value_t = 1)]
    pub vibration_input: usize,
    /// Sample rate, Hz (default: the device's).
    #[arg(long)]
    pub rate: Option<u32>,
    /// Frames per audio callback (default: the host's).
    #[arg(long)]
    pub buffer: Option<u32>,
    /// Tach pulses per revolution.
    #[arg(long, default_value_t = 1)]
    pub pulses_per_rev: usize,
    /// Stop by itself once the speed, having been above this, falls below it, rpm.
    #[arg(long)]
    pub stop_below: Option<f64>,
    /// Stop after this many seconds.
    #[arg(long)]
    pub seconds: Option<f64>,
    /// Vibration sensor sensitivity, mV per m/s² (kept with the run in a session).
    #[arg(long)]
    pub sensitivity: Option<f64>,
    /// Volts at digital full scale (kept with the run in a session).
    #[arg(long, default_value_t = 1.0)]
    pub full_scale_volts: f64,
    /// A note kept with the run in a session (machine, sensor place, direction).
    #[arg(long, default_value = "")]
    pub note: String,
    /// Stop with an error when no samples arrive for this many seconds.
    #[arg(long, default_value_t = 3.0)]
    pub stall: f64,
}

/// `tapgrid coastdown`.
#[derive(Debug, Args)]
pub struct CoastdownArgs {
    /// The run recording (WAV, two or more channels).
    pub wav: PathBuf,
    /// Output folder for tracking.csv and result.json.
    #[arg(long)]
    pub out: PathBuf,
    /// Channel of the tach (0-based).
    #[arg(long, default_value_t = 0)]
    pub tach_channel: usize,
    /// Channel of the vibration sensor (0-based).
    #[arg(long, default_value_t = 1)]
    pub channel: usize,
    /// Vibration sensor sensitivity, mV per m/s² (default: samples taken as m/s² at full
    /// scale 1).
    #[arg(long)]
    pub sensitivity: Option<f64>,
    /// Volts at digital full scale.
    #[arg(long, default_value_t = 1.0)]
    pub full_scale_volts: f64,
    /// Tach pulses per revolution.
    #[arg(long, default_value_t = 1)]
    pub pulses_per_rev: usize,
    /// Orders to track, e.g. 1,2.
    #[arg(long, default_value = "1,2")]
    pub orders: String,
    /// Quantity of the amplitudes.
    #[arg(long, value_enum, default_value_t = QuantityArg::Acceleration)]
    pub quantity: QuantityArg,
    /// First-order AC-coupling corner of the vibration input to undo, Hz.
    #[arg(long, default_value_t = 0.0)]
    pub ac_corner: f64,
    /// A rotor file (or a session with a service rotor): its predicted critical speeds over the
    /// run's range are compared with the measured ones, and its unbalance response fitted to
    /// the measured 1×, in result.json.
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Where the vibration sensor sits along the rotor, m, for the model's response (default:
    /// the first bearing).
    #[arg(long)]
    pub sensor_position: Option<f64>,
}

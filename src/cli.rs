//! The command line: a stable, documented interface (see README.md).

use std::path::{Path, PathBuf};

use anyhow::{Context, Result, anyhow, bail};
use clap::{Args, Parser, Subcommand, ValueEnum};

use crate::acquire::wav::SampleEncoding;
use crate::acquire::wavset::WavSet;
use crate::analysis::{self, Dataset};
use crate::modal::{Method, ModalResult, ModalSettings, Selection};
use crate::report;
use crate::session::{Part, Session};
use crate::setup::{Estimator, Layout, Setup, Slope, TriggerLevel};
use crate::sim::Scenario;
use crate::units::Sensitivity;

/// tapgrid: impact modal testing of shafts and rotors.
#[derive(Debug, Parser)]
#[command(
    name = "tapgrid",
    version,
    about,
    long_about = "tapgrid: impact modal testing of shafts and rotors.\n\nWith no arguments it opens the \
                  window on the bundled demo session; with a folder it opens that session or WAV set; \
                  with a subcommand it runs headless.",
    args_conflicts_with_subcommands = true
)]
pub struct Cli {
    /// A session or WAV set folder to open in the window.
    pub open: Option<PathBuf>,
    /// View to show first: capture, setup, stations, hits, frf, poles, modes, model, margins.
    #[arg(long)]
    pub view: Option<String>,
    /// What to do (none: open the window).
    #[command(subcommand)]
    pub command: Option<Command>,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Analyse a WAV set or a session: hits, verdicts, FRFs → frf.csv and result.json.
    Analyze(AnalyzeArgs),
    /// Write a test report (one HTML file): setup, hit verdicts, FRFs, modes, model, margins.
    Report(ReportArgs),
    /// Import a WAV set into a new session folder (recordings are copied, never modified).
    Import(ImportArgs),
    /// Capture hits from an audio interface into a session, headless (exits 0 when done).
    Capture(CaptureArgs),
    /// List audio input devices with the ids `capture --device` takes.
    Devices,
    /// Natural frequencies and mode shapes of a shaft model (JSON) → modes.json.
    Model(ModelArgs),
    /// Pair a test's modes with a shaft model's by MAC: frequency differences, MAC matrix.
    Correlate(CorrelateArgs),
    /// Running-speed margin check of measured modes and/or model critical speeds (advisory).
    Margin(MarginArgs),
    /// Calibration helpers on a recording: sensitivity, full-scale volts, mass check, loopback.
    Calibrate(CalibrateArgs),
    /// Override a hit's verdict in a session (accept, reject, or back to automatic).
    Verdict(VerdictArgs),
    /// Write a simulated WAV set, with truth.json, from tapgrid's own beam physics.
    Simulate(SimulateArgs),
    /// Analyse the bundled demo session and print its summary.
    Demo(DemoArgs),
    /// Benchmark helper: decode every recording of a set (both channels) and nothing else.
    #[command(hide = true)]
    BenchDecode(BenchDecodeArgs),
}

/// `tapgrid bench-decode`.
#[derive(Debug, Args)]
pub struct BenchDecodeArgs {
    /// A WAV set or session folder.
    pub input: PathBuf,
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

fn pair<T: std::str::FromStr>(text: &str, what: &str) -> Result<(T, T)> {
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
    /// The HTML file to write.
    #[arg(long)]
    pub out: PathBuf,
    /// The shaft model (JSON), or a session holding one (default: the input's own model, if any).
    #[arg(long)]
    pub model: Option<PathBuf>,
    /// Part name shown in the title (default: the session's part, else the folder's name).
    #[arg(long)]
    pub part: Option<String>,
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
fn modal_settings(a: &ModalArgs, base: ModalSettings) -> Result<Option<ModalSettings>> {
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
    /// Hit index (0-based, in recording order).
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

fn tapgrid_second_plane(split: f64, angle_deg: f64) -> crate::sim::SecondPlane {
    crate::sim::SecondPlane { split, angle_deg }
}

fn station_hit(s: &str) -> Result<(u32, usize)> {
    let (a, b) = s
        .split_once(':')
        .ok_or_else(|| anyhow!("expected STATION:HIT, got {s:?}"))?;
    Ok((a.trim().parse()?, b.trim().parse()?))
}

/// `tapgrid demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {
    /// Output folder (default: a folder in the system temp dir).
    #[arg(long)]
    pub out: Option<PathBuf>,
}

/// Runs a parsed command line.
pub fn run(cli: Cli) -> Result<()> {
    let Some(command) = cli.command else {
        if let Some(p) = &cli.open
            && !p.is_dir()
        {
            bail!(
                "{}: is not a folder (expected a session or a WAV set folder)",
                p.display()
            );
        }
        let view = match cli.view.as_deref() {
            Some(name) => Some(crate::app::View::from_name(name).ok_or_else(|| {
                anyhow!(
                    "--view {name:?}: use capture, setup, stations, hits, frf, poles, modes, \
                     model or margins"
                )
            })?),
            None => None,
        };
        return crate::app::run(cli.open, view);
    };
    match command {
        Command::Analyze(a) => analyze(&a.input, &a.out, &a.setup, &a.modal),
        Command::Report(a) => report(a),
        Command::Import(a) => import(a),
        Command::Capture(a) => capture(a),
        Command::Devices => devices(),
        Command::Model(a) => model(a),
        Command::Correlate(a) => correlate(a),
        Command::Margin(a) => margin(a),
        Command::Calibrate(a) => calibrate(a),
        Command::Verdict(a) => verdict(a),
        Command::Simulate(a) => simulate(a),
        Command::BenchDecode(a) => {
            let (data, _) = crate::pipeline::open_dataset(&a.input, Setup::default().spacing_m)?;
            let frames = analysis::decode_all(&data, &Setup::default())?;
            println!("decoded {frames} frames");
            Ok(())
        }
        Command::Demo(a) => {
            let dir = demo_session_dir()?;
            let out = a
                .out
                .unwrap_or_else(|| std::env::temp_dir().join("tapgrid-demo"));
            println!("demo session: {}", dir.display());
            analyze(&dir, &out, &SetupArgs::default(), &ModalArgs::default())
        }
    }
}

/// How long a command waits for another writer of the same session to finish.
const LOCK_WAIT: std::time::Duration = std::time::Duration::from_secs(30);

/// The bundled demo session, or one the simulator makes on first use.
fn demo_session_dir() -> Result<PathBuf> {
    Ok(crate::sim::demo::demo_session(
        &crate::sim::demo::default_root(),
    )?)
}

/// A test opened for analysis with the command line's options on top of its own setup and
/// modal settings (`modal` is `None` for `--modes none`).
struct Opened {
    data: Dataset,
    setup: Setup,
    modal: Option<ModalSettings>,
    session: Option<Session>,
}

fn open_test(input: &Path, args: &SetupArgs, modal_args: &ModalArgs) -> Result<Opened> {
    let t = crate::pipeline::open_test(input, |s| args.apply(s).map_err(|e| format!("{e:#}")))?;
    Ok(Opened {
        modal: modal_settings(modal_args, t.fit)?,
        data: t.data,
        setup: t.setup,
        session: t.session,
    })
}

/// The modal fit of an analysed test (empty for `--modes none` or without an accepted hit).
fn fit_modes(
    input: &Path,
    a: &crate::analysis::Analysis,
    modal: Option<&ModalSettings>,
) -> Result<ModalResult> {
    match modal {
        Some(ms) => {
            crate::pipeline::fit(a, ms).map_err(|m| anyhow!("{}: modal fit: {m}", input.display()))
        }
        None => Ok(ModalResult::default()),
    }
}

impl Opened {
    /// A fit's modes as the model study takes them, over the band this test covered.
    fn test_modes(&self, m: &ModalResult) -> crate::model::study::TestModes {
        let ms = self.modal.clone().unwrap_or_default();
        crate::pipeline::test_modes(&ms, &self.setup, m)
    }
}

fn analyze(input: &Path, out: &Path, args: &SetupArgs, modal_args: &ModalArgs) -> Result<()> {
    let t = open_test(input, args, modal_args)?;
    let t0 = std::time::Instant::now();
    let a = analysis::run(&t.data, &t.setup)?;
    let t1 = std::time::Instant::now();
    // frf.csv needs only the FRFs: written on its own thread while the fit runs.
    let (csv, modes) = std::thread::scope(|scope| {
        let csv = scope.spawn(|| report::write_frf_csv(&a, out));
        let modes = fit_modes(input, &a, t.modal.as_ref());
        let csv = csv.join().unwrap_or_else(|_| {
            Err(crate::acquire::InputError::new(
                out,
                "frf.csv writer failed",
            ))
        });
        (csv, modes)
    });
    csv?;
    let modes = modes?;
    let t1b = std::time::Instant::now();
    report::write_fit_outputs(&a, &modes, out)?;
    let t2 = std::time::Instant::now();
    if std::env::var_os("TAPGRID_TIMING").is_some() {
        eprintln!(
            "timing: decode+chain {:.3} s, modal {:.3} s (stabilization {:.3} s), outputs {:.3} s",
            (t1 - t0).as_secs_f64(),
            (t1b - t1).as_secs_f64(),
            modes.stabilization_seconds,
            (t2 - t1b).as_secs_f64()
        );
    }
    print!("{}", report::summary(&a));
    print!("{}", report::modes_summary(&modes));
    println!(
        "wrote {} and {}",
        out.join("frf.csv").display(),
        out.join("result.json").display()
    );
    Ok(())
}

fn report(a: ReportArgs) -> Result<()> {
    let t = open_test(&a.input, &a.setup, &a.modal)?;
    let analysis = analysis::run(&t.data, &t.setup)?;
    let modes = fit_modes(&a.input, &analysis, t.modal.as_ref())?;
    let (part, notes, own_model) = match &t.session {
        Some(s) => (
            s.manifest.part.name.clone(),
            s.manifest.part.notes.clone(),
            s.manifest.model.clone(),
        ),
        None => (String::new(), String::new(), None),
    };
    let study = match &a.model {
        Some(p) => Some(read_study(p)?),
        None => own_model,
    };
    let result = match &study {
        Some(st) => Some(
            crate::pipeline::study(st, Some(&t.test_modes(&modes)))
                .map_err(|e| anyhow!("{}: shaft model: {e}", a.input.display()))?,
        ),
        None => None,
    };
    let written = report::document::utc_now();
    let part = a.part.unwrap_or(part);
    let input = report::document::ReportInput {
        part: &part,
        notes: &notes,
        source: &a.input,
        analysis: &analysis,
        modes: &modes,
        study: study.as_ref().zip(result.as_ref()),
        written_utc: &written,
    };
    report::document::write_html(&a.out, &input)?;
    print!("{}", report::summary(&analysis));
    print!("{}", report::modes_summary(&modes));
    println!("wrote {}", a.out.display());
    Ok(())
}

fn import(a: ImportArgs) -> Result<()> {
    let setup = a.setup.apply(Setup::default())?;
    let set = WavSet::scan(&a.wavset, setup.spacing_m)?;
    let data = Dataset::from_wavset(&set);
    // Analyse first so a set that cannot be analysed makes no half session.
    let result = analysis::run(&data, &setup)?;
    let mut s = Session::import_wavset(
        &set,
        &a.session,
        setup,
        Part {
            name: a.part,
            notes: String::new(),
        },
    )?;
    s.manifest.hits = crate::session::saved_hits(&result);
    s.save()?;
    print!("{}", report::summary(&result));
    println!("session written to {}", a.session.display());
    Ok(())
}

/// A shaft model from a JSON file, or the model saved in a session folder.
fn read_study(path: &Path) -> Result<crate::model::study::Study> {
    if crate::session::Session::is_session(path) {
        let s = crate::session::Session::open(path)?;
        return s.manifest.model.ok_or_else(|| {
            anyhow!(
                "{}: the session has no shaft model (save one with `tapgrid model SHAFT.json \
                 --into {}`)",
                path.display(),
                path.display()
            )
        });
    }
    if path.is_dir() {
        bail!(
            "{}: is a folder but not a tapgrid session; give a shaft model JSON file or a \
             session holding one",
            path.display()
        );
    }
    Ok(crate::model::study::Study::new(
        crate::model::run::read_shaft(path)?,
    ))
}

fn model(a: ModelArgs) -> Result<()> {
    use crate::model::run;
    let shaft = read_study(&a.shaft)?.shaft;
    if let Some(dir) = &a.into {
        let _lock = crate::session::lock::SessionLock::acquire(dir, "model --into", LOCK_WAIT)?;
        let mut s = crate::session::Session::open(dir)?;
        match &mut s.manifest.model {
            Some(st) => st.shaft = shaft.clone(),
            None => s.manifest.model = Some(crate::model::study::Study::new(shaft.clone())),
        }
        s.save()?;
        println!("saved the shaft model in {}", dir.display());
        if a.out.is_none() {
            return Ok(());
        }
    }
    let Some(out) = &a.out else {
        bail!("give --out DIR (or --into SESSION)");
    };
    if a.modes == 0 || a.modes > 200 {
        bail!("--modes must be between 1 and 200");
    }
    let stations = match &a.stations {
        Some(p) => crate::acquire::wavset::read_stations_csv(p)?,
        None => Default::default(),
    };
    let length = shaft.length_m();
    for (st, x) in &stations {
        if !(0.0..=length + 1e-9).contains(x) {
            bail!(
                "{}: station {st} at {x} m lies outside the part (0 to {length} m)",
                a.stations
                    .as_ref()
                    .map(|p| p.display().to_string())
                    .unwrap_or_default()
            );
        }
    }
    let at: Vec<f64> = stations.values().copied().collect();
    let c = run::converged_modes(
        &shaft,
        crate::model::beam::BeamTheory::Timoshenko,
        a.modes,
        &at,
    )
    .map_err(|m| anyhow!("{}: {m}", a.shaft.display()))?;
    std::fs::create_dir_all(out)
        .with_context(|| format!("{}: cannot create folder", out.display()))?;
    let path = out.join("modes.json");
    crate::atomic::write_bytes(&path, run::modes_json(&c, &stations).as_bytes())
        .with_context(|| format!("{}: cannot write", path.display()))?;
    println!(
        "{} elements (last refinement changed the frequencies by {:.1e})",
        c.elements, c.last_change
    );
    println!("mode  frequency_hz  kind");
    for (i, m) in c.modes.iter().enumerate() {
        println!(
            "{:4}  {:12.3}  {}",
            i + 1,
            m.frequency_hz,
            if m.rigid_body {
                "rigid body"
            } else {
                "flexible"
            }
        );
    }
    println!("wrote {}", path.display());
    if let Some(r) = &a.stiffness_map {
        let (lo, hi) = colon_range(r, "stiffness-map")?;
        let map = crate::model::correlate::stiffness_map(&shaft, [lo, hi], 25, a.modes)
            .map_err(|m| anyhow!("{}: {m}", a.shaft.display()))?;
        let mut csv = String::from("stiffness_n_per_m");
        for i in 0..a.modes {
            csv.push_str(&format!(",mode{}_hz", i + 1));
        }
        csv.push('\n');
        for (k, f) in &map {
            csv.push_str(&format!("{k:.6e}"));
            for v in f {
                csv.push_str(&format!(",{v:.4}"));
            }
            csv.push('\n');
        }
        let p = out.join("stiffness_map.csv");
        crate::atomic::write_bytes(&p, csv.as_bytes())
            .with_context(|| format!("{}: cannot write", p.display()))?;
        println!("wrote {}", p.display());
    }
    println!("note: undamped bending modes without gyroscopic effects; advisory only");
    Ok(())
}

/// `LO:HI` as two numbers.
fn colon_range(text: &str, what: &str) -> Result<(f64, f64)> {
    let (a, b) = text
        .split_once(':')
        .ok_or_else(|| anyhow!("--{what}: give LO:HI, got {text:?}"))?;
    let p = |v: &str| {
        v.trim()
            .parse::<f64>()
            .map_err(|_| anyhow!("--{what}: cannot read {v:?} in {text:?}"))
    };
    Ok((p(a)?, p(b)?))
}

/// Analyses and fits a session or WAV set: its own setup and fit settings with the given setup
/// options on top. Returns the fit and its modes as the model study takes them.
fn fitted(
    input: &Path,
    setup: &SetupArgs,
) -> Result<(ModalResult, crate::model::study::TestModes)> {
    let t = open_test(input, setup, &ModalArgs::default())?;
    let a = analysis::run(&t.data, &t.setup)?;
    if crate::modal::FrfSet::from_analysis(&a).is_none() {
        bail!("{}: no station has an accepted hit", input.display());
    }
    let m = fit_modes(input, &a, t.modal.as_ref())?;
    let test = t.test_modes(&m);
    Ok((m, test))
}

fn correlate(a: CorrelateArgs) -> Result<()> {
    let model_path = a.model.clone().unwrap_or_else(|| a.input.clone());
    let mut study = read_study(&model_path)?;
    study.min_mac = a.min_mac;
    let (_, test) = fitted(&a.input, &a.setup)?;
    let r = crate::pipeline::study(&study, Some(&test)).map_err(|e| {
        anyhow!(
            "{} against {}: {e}",
            a.input.display(),
            model_path.display()
        )
    })?;
    let c = r
        .correlation
        .unwrap_or(crate::model::correlate::Correlation {
            pairs: Vec::new(),
            mac: Vec::new(),
            unpaired_test: Vec::new(),
            unpaired_model: Vec::new(),
        });
    println!("test  model  test_hz     model_hz    diff_%   MAC");
    for p in &c.pairs {
        println!(
            "{:4}  {:5}  {:10.2}  {:10.2}  {:+7.2}  {:.3}",
            p.test + 1,
            p.model + 1,
            p.test_hz,
            p.model_hz,
            p.difference_pct,
            p.mac
        );
    }
    for &i in &c.unpaired_test {
        println!(
            "test mode {} ({:.2} Hz): no model mode with MAC ≥ {}",
            i + 1,
            test.modes[i].0,
            a.min_mac
        );
    }
    for &j in &r.missed_in_band {
        println!(
            "model mode {} ({:.2} Hz): inside the tested band but not found in the test",
            j + 1,
            r.tested.modes[j].frequency_hz
        );
    }
    if let Some(out) = &a.out {
        std::fs::create_dir_all(out)
            .with_context(|| format!("{}: cannot create folder", out.display()))?;
        let p = out.join("correlation.json");
        let text = serde_json::to_string_pretty(&c).unwrap_or_default();
        crate::atomic::write_bytes(&p, text.as_bytes())
            .with_context(|| format!("{}: cannot write", p.display()))?;
        println!("wrote {}", p.display());
    }
    Ok(())
}

fn margin(a: MarginArgs) -> Result<()> {
    use crate::model::margin::{MarginRule, Side, check};
    use crate::model::study::ResonanceSource;
    let study = a.model.as_deref().map(read_study).transpose()?;
    let (lo, hi) = match (&a.speed, study.as_ref().and_then(|s| s.running_speed_rpm)) {
        (Some(t), _) => colon_range(t, "speed")?,
        (None, Some([lo, hi])) => (lo, hi),
        (None, None) => bail!("give the operating range with --speed MIN:MAX (rpm)"),
    };
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && hi >= lo) {
        bail!("--speed: give MIN:MAX rpm with 0 < MIN ≤ MAX");
    }
    // The rule and orders: those given, else the model study's (as the report and the window
    // use them), else the defaults.
    let base = study.as_ref().map(|s| s.rule).unwrap_or_default();
    let rule = MarginRule {
        af_threshold: a.af_threshold.unwrap_or(base.af_threshold),
        below_cap_pct: a.below_cap.unwrap_or(base.below_cap_pct),
        above_cap_pct: a.above_cap.unwrap_or(base.above_cap_pct),
        ..base
    };
    for (v, name) in [
        (rule.af_threshold, "af-threshold"),
        (rule.below_cap_pct, "below-cap"),
        (rule.above_cap_pct, "above-cap"),
    ] {
        if !(v.is_finite() && (0.0..=1000.0).contains(&v)) {
            bail!("--{name}: give a number between 0 and 1000, got {v}");
        }
    }
    let orders: Vec<u32> = match &a.orders {
        Some(t) => t
            .split(',')
            .map(|x| {
                x.trim()
                    .parse()
                    .ok()
                    .filter(|o| (1..=100).contains(o))
                    .ok_or_else(|| anyhow!("--orders: cannot read {x:?} (orders 1 to 100)"))
            })
            .collect::<Result<_>>()?,
        None => study
            .as_ref()
            .map(|s| s.orders.clone())
            .filter(|o| !o.is_empty())
            .unwrap_or_else(|| vec![1, 2]),
    };
    let mut lines: Vec<(&str, crate::model::margin::MarginCheck)> = Vec::new();
    if let Some(t) = &a.modes {
        let mut given: Vec<(f64, Option<f64>)> = Vec::new();
        for item in t.split(',').filter(|x| !x.trim().is_empty()) {
            let mut it = item.split(':');
            let f: f64 = it
                .next()
                .and_then(|v| v.trim().parse().ok())
                .filter(|f: &f64| f.is_finite() && *f > 0.0)
                .ok_or_else(|| anyhow!("--modes: cannot read {item:?}; use F or F:ZETA"))?;
            let z: Option<f64> = match it.next() {
                None => None,
                Some(v) => Some(
                    v.trim()
                        .parse()
                        .map_err(|_| anyhow!("--modes: cannot read {item:?}; use F or F:ZETA"))?,
                ),
            };
            if it.next().is_some() || z.is_some_and(|z| !(z.is_finite() && z > 0.0 && z < 1.0)) {
                bail!("--modes: cannot read {item:?}; use F or F:ZETA with 0 < ZETA < 1");
            }
            given.push((f, z));
        }
        lines.extend(
            check(&given, [lo, hi], &orders, &rule)
                .into_iter()
                .map(|c| ("given", c)),
        );
    }
    let test = a
        .test
        .as_ref()
        .map(|t| fitted(t, &a.setup).map(|(_, test)| test))
        .transpose()?;
    match (&study, &a.model) {
        (Some(st), Some(p)) => {
            // The model study decides the model's resonances and the measured ones' lines, with
            // the range, rule and orders above: the same lines as the report and the window.
            let mut st = st.clone();
            st.running_speed_rpm = Some([lo, hi]);
            st.rule = rule;
            st.orders = orders.clone();
            let r = crate::pipeline::study(&st, test.as_ref())
                .map_err(|e| anyhow!("{}: {e}", p.display()))?;
            for l in r.margins {
                let source = match l.source {
                    ResonanceSource::Measured => "measured",
                    ResonanceSource::ModelInService => "model",
                    ResonanceSource::ModelAsTested => "model",
                };
                lines.push((source, l.check));
            }
            for w in &r.warnings {
                println!("note: {w}");
            }
        }
        _ => {
            if let Some(t) = &test {
                let measured: Vec<(f64, Option<f64>)> =
                    t.modes.iter().map(|m| (m.0, m.1)).collect();
                lines.extend(
                    check(&measured, [lo, hi], &orders, &rule)
                        .into_iter()
                        .map(|c| ("measured", c)),
                );
            }
        }
    }
    if lines.is_empty() {
        bail!("give resonances with --modes, --test or --model");
    }
    println!(
        "source    f_hz      order  critical_rpm  AF      side    margin_%  required_%  verdict"
    );
    for (source, c) in &lines {
        let side = match c.side {
            Side::Below => "below",
            Side::Inside => "INSIDE",
            Side::Above => "above",
        };
        println!(
            "{:8}  {:8.2}  {:5}  {:12.0}  {:6.1}  {:6}  {:8.1}  {:10.1}  {}",
            source,
            c.frequency_hz,
            c.order,
            c.critical_rpm,
            c.amplification_factor,
            side,
            c.margin_pct,
            c.required_pct,
            if c.ok { "ok" } else { "TOO CLOSE" }
        );
    }
    println!("{}", crate::cautions::MARGIN_NOTE);
    Ok(())
}

fn devices() -> Result<()> {
    let list = crate::acquire::live::list_inputs()?;
    if list.is_empty() {
        println!("no input devices found");
    }
    for d in list {
        println!("{}", d.id);
        println!("    name: {}", d.name);
        if let Some(c) = &d.default_config {
            println!("    default: {c}");
        }
        for f in &d.formats {
            println!("    supports: {f}");
        }
    }
    println!("generator");
    println!("    name: built-in synthetic hammer test (no hardware), 51200 Hz");
    Ok(())
}

fn capture(a: CaptureArgs) -> Result<()> {
    use crate::capture::{Engine, Event, Plan};
    use std::io::Write;
    let setup = a.setup.apply(Setup::default())?;
    let mut source = crate::capture::open_source(
        &a.device,
        [setup.channel_a.index, setup.channel_b.index],
        a.rate,
        a.buffer,
    )?;
    let mut engine = Engine::open(
        &a.session,
        setup,
        Part {
            name: a.part.clone(),
            notes: String::new(),
        },
        source.sample_rate_hz(),
    )?;
    let plan = Plan {
        stations: vec![a.station],
        hits: a.hits,
        positions_m: a
            .position
            .map(|p| [(a.station, p)].into())
            .unwrap_or_default(),
        stall: std::time::Duration::from_secs_f64(a.stall.max(0.1)),
    };
    let stdout = std::io::stdout();
    let dir = crate::capture::run(source.as_mut(), &mut engine, &plan, |ev| {
        let mut o = stdout.lock();
        let _ = match ev {
            Event::Armed { station, accepted } => {
                writeln!(
                    o,
                    "armed station {station} ({accepted} accepted so far): tap"
                )
            }
            Event::Hit(h) => writeln!(
                o,
                "saved station {} hit {} at {:.3} s: {}{} record {}+{} checksum {:016x} latency {:.1} ms ({} accepted)",
                h.station,
                h.index + 1,
                h.time_s,
                if h.accepted { "kept" } else { "rejected" },
                if h.reasons.is_empty() {
                    String::new()
                } else {
                    format!(
                        " ({})",
                        h.reasons
                            .iter()
                            .map(|r| r.word())
                            .collect::<Vec<_>>()
                            .join(", ")
                    )
                },
                h.record_start,
                h.record_samples,
                h.checksum,
                h.latency_s * 1e3,
                h.accepted_so_far
            ),
            Event::StationDone { station, accepted } => {
                writeln!(o, "station {station} done: {accepted} accepted hits")
            }
            Event::Health(h) => writeln!(
                o,
                "warning: {} frames dropped (worker too slow), {} stream errors",
                h.overrun_frames, h.stream_errors
            ),
            Event::Levels { .. } => Ok(()),
        };
        let _ = o.flush();
    })?;
    println!("session: {}", dir.display());
    Ok(())
}

fn calibrate(a: CalibrateArgs) -> Result<()> {
    use crate::signal::calibration as cal;
    match a.what {
        CalibrateWhat::Sensitivity {
            wav,
            channel,
            frequency,
            rms,
            full_scale_volts,
        } => {
            let two = crate::acquire::wav::read_two_channels(&wav, channel, channel)?;
            let s = cal::tone(&two.a, two.info.sample_rate_hz, frequency)
                .map_err(|m| anyhow!("{}: {m}", wav.display()))?;
            let v_rms = s.rms_fs * full_scale_volts;
            println!(
                "tone {:.2} Hz at {:.5} of full scale rms = {:.4} V rms (purity {:.1} %)",
                s.frequency_hz,
                s.rms_fs,
                v_rms,
                s.purity * 100.0
            );
            println!(
                "sensitivity {:.4} mV/(m/s²) = {:.3} mV/g",
                v_rms / rms * 1e3,
                v_rms / rms * 1e3 * crate::units::STANDARD_GRAVITY_M_S2
            );
        }
        CalibrateWhat::FullScale {
            wav,
            channel,
            frequency,
            volts_rms,
        } => {
            let two = crate::acquire::wav::read_two_channels(&wav, channel, channel)?;
            let s = cal::tone(&two.a, two.info.sample_rate_hz, frequency)
                .map_err(|m| anyhow!("{}: {m}", wav.display()))?;
            println!(
                "tone {:.2} Hz at {:.5} of full scale rms; full scale = {:.4} V (purity {:.1} %)",
                s.frequency_hz,
                s.rms_fs,
                volts_rms / s.rms_fs,
                s.purity * 100.0
            );
        }
        CalibrateWhat::Mass {
            wav,
            mass_kg,
            setup,
        } => {
            let setup = setup.apply(Setup::default())?;
            let two = crate::acquire::wav::read_two_channels(
                &wav,
                setup.channel_a.index,
                setup.channel_b.index,
            )?;
            let r = cal::mass_check(&two.a, &two.b, two.info.sample_rate_hz, &setup, mass_kg)
                .map_err(|m| anyhow!("{}: {m}", wav.display()))?;
            println!(
                "mass check: measured |H|·m = {:.4} (1 = calibrated) over {:.0}–{:.0} Hz, spread ±{:.1} %, {} hits",
                r.ratio,
                r.band_hz[0],
                r.band_hz[1],
                r.spread * 100.0,
                r.hits
            );
            println!(
                "multiply the accelerometer/hammer sensitivity ratio (B/A) by {:.4} to calibrate",
                r.ratio
            );
        }
        CalibrateWhat::Loopback { wav, channels } => {
            let (ca, cb) = pair::<usize>(&channels, "channels")?;
            let two = crate::acquire::wav::read_two_channels(&wav, ca, cb)?;
            let r = cal::loopback(&two.a, &two.b, two.info.sample_rate_hz)
                .map_err(|m| anyhow!("{}: {m}", wav.display()))?;
            println!(
                "loopback: |H| {:.4} (worst {:.4}), phase worst {:.2}°, polarity {}",
                r.gain,
                r.worst_gain,
                r.worst_phase_deg,
                if r.inverted { "INVERTED" } else { "correct" }
            );
        }
    }
    Ok(())
}

fn verdict(a: VerdictArgs) -> Result<()> {
    // Read, change and write under the session's lock, so two commands cannot lose an update.
    let _lock = crate::session::lock::SessionLock::acquire(&a.session, "verdict", LOCK_WAIT)?;
    let mut s = Session::open(&a.session)?;
    let v = match a.verdict {
        VerdictArg::Accept => Some(true),
        VerdictArg::Reject => Some(false),
        VerdictArg::Auto => None,
    };
    s.set_override(a.station, a.hit, v)
        .map_err(|m| anyhow!("{}: {m}", a.session.display()))?;
    let data = s.dataset();
    let result = analysis::run(&data, &s.manifest.setup)?;
    s.manifest.hits = crate::session::saved_hits(&result);
    s.save()?;
    print!("{}", report::summary(&result));
    Ok(())
}

fn simulate(a: SimulateArgs) -> Result<()> {
    let mut sc = match &a.scenario {
        Some(p) => {
            let text = std::fs::read_to_string(p)
                .with_context(|| format!("{}: cannot read", p.display()))?;
            serde_json::from_str::<Scenario>(&text)
                .with_context(|| format!("{}: not a valid scenario", p.display()))?
        }
        None => Scenario::pump_shaft(),
    };
    if let Some(l) = a.layout {
        sc.set_layout(l.into());
    }
    if let Some(n) = a.stations {
        if n < 2 {
            bail!("--stations must be at least 2");
        }
        let l = sc.shaft.length_m();
        sc.stations_m = (0..n).map(|i| l * i as f64 / (n - 1) as f64).collect();
        sc.drive_station = sc.drive_station.min(n as u32);
        sc.reference_station = sc.reference_station.min(n as u32);
    }
    if let Some(h) = a.hits {
        sc.hits_per_station = h;
    }
    if let Some(fs) = a.fs {
        sc.rig.sample_rate_hz = fs;
    }
    if let Some(e) = a.encoding {
        sc.rig.encoding = e.into();
    }
    if let Some(z) = a.damping {
        sc.damping_ratio = z;
    }
    for d in &a.double_hit {
        sc.double_hits.push(station_hit(d)?);
    }
    for o in &a.overload {
        sc.overloads.push(station_hit(o)?);
    }
    for w in &a.weak {
        sc.weak_hits.push(station_hit(w)?);
    }
    for s in &a.soft {
        sc.soft_hits.push(station_hit(s)?);
    }
    if let Some(p) = a.pulse {
        if !(p.is_finite() && p > 0.0 && p < 0.05) {
            bail!("--pulse {p} s must be between 0 and 0.05 s");
        }
        sc.pulse_s = p;
    }
    if let Some(sp) = &a.second_plane {
        let (s, g) = sp
            .split_once(':')
            .ok_or_else(|| anyhow!("expected --second-plane SPLIT:ANGLE, got {sp:?}"))?;
        let (split, angle_deg): (f64, f64) = (s.trim().parse()?, g.trim().parse()?);
        if !(split.is_finite() && split > 0.0 && split < 0.5 && angle_deg.is_finite()) {
            bail!("--second-plane {sp}: SPLIT must be in (0, 0.5) and ANGLE a number of degrees");
        }
        sc.second_plane = Some(tapgrid_second_plane(split, angle_deg));
    }
    if let Some(n) = a.noise {
        sc.rig.noise_volts = [n, n];
    }
    if let Some(h) = a.hum {
        sc.rig.hum_volts = h;
    }
    if let Some(s) = a.seed {
        sc.seed = s;
    }
    if let Some(i) = a.interval {
        sc.hit_interval_s = i;
    }
    let truth = sc.write(&a.out)?;
    println!(
        "wrote {} stations × {} hits to {}; modes below 0.45 fs:",
        sc.stations_m.len(),
        sc.hits_per_station,
        a.out.display()
    );
    for m in &truth.modes {
        println!("  {:9.2} Hz  ζ = {:.4}", m.frequency_hz, m.damping_ratio);
    }
    Ok(())
}

//! The command line: a stable, documented interface (see README.md).
//!
//! `args` holds the options of every command and their parsers; one file per family of commands
//! holds their bodies: `test_cmds` (analyze, report, import, verdict), `model_cmds` (model,
//! correlate, margin), `capture_cmds` (devices, capture, calibrate), `sim_cmds` (simulate).

mod args;
mod capture_cmds;
mod coast_cmds;
mod model_cmds;
mod rotor_cmds;
mod sim_cmds;
mod test_cmds;

pub use args::*;
use capture_cmds::{calibrate, capture, devices};
use coast_cmds::{coastdown, record_run};
use model_cmds::{correlate, margin, model};
use rotor_cmds::{bearing, rotor};
use sim_cmds::simulate;
use test_cmds::{analyze, bench_verdict, import, report, verdict};

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
    /// View to show first: capture, setup, stations, hits, frf, poles, modes, model, margins, rotor,
    /// run, compare.
    #[arg(long)]
    pub view: Option<String>,
    /// A run-up or coast-down recording to track in the window (opens the run view).
    #[arg(long)]
    pub run: Option<PathBuf>,
    /// Another test (session or WAV set) to compare the opened one with (opens Two tests).
    #[arg(long)]
    pub compare: Option<PathBuf>,
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
    /// Plan a test before tapping: modes in the band and their nodes, reference placement,
    /// stations needed, suspension points, hammer tip and record length (text, plan.json).
    Plan(PlanArgs),
    /// Pair a test's modes with a shaft model's by MAC: frequency differences, MAC matrix.
    Correlate(CorrelateArgs),
    /// Check the data's physics: driving point signs and antiresonances, mass line,
    /// reciprocity with a second reference, linearity, spatial aliasing, reference near a node.
    Check(CheckArgs),
    /// Compare two tests (before/after, or two parts): modes paired by MAC with Δf, Δζ; FRFs
    /// station by station (by position when the grids differ).
    Compare(CompareArgs),
    /// The report's test record kept in a session: operator, reviewer, site, date, support,
    /// conditioning, instruments with serial numbers and calibration dates.
    ReportDetails(ReportDetailsArgs),
    /// Running-speed margin check of measured modes and/or model critical speeds (advisory).
    Margin(MarginArgs),
    /// A bearing's operating point and eight stiffness and damping coefficients (JSON to stdout).
    Bearing(BearingArgs),
    /// The rotor at speed: Campbell diagram, critical speeds, stability threshold, unbalance
    /// response → campbell.json, unbalance.csv (advisory).
    Rotor(RotorArgs),
    /// Track a run-up or coast-down (tach + accelerometer on two channels): 1×/2× against
    /// speed, critical speeds, AF, subsynchronous whirl → tracking.csv, result.json (advisory).
    Coastdown(CoastdownArgs),
    /// Record a run-up or coast-down live (tach + accelerometer) into a session or a folder,
    /// saved in segments as it goes; stops on Enter, on a time or when the machine has come down.
    RecordRun(RecordRunArgs),
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
    /// Benchmark helper: what the window's worker does after a verdict changes on a session —
    /// analysis, fit and the model study with its solves cached — timed, `--repeat` times.
    #[command(hide = true)]
    BenchVerdict(BenchVerdictArgs),
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
                     model, margins, rotor, run or compare"
                )
            })?),
            None => None,
        };
        if let Some(p) = &cli.compare
            && !p.is_dir()
        {
            bail!(
                "{}: is not a folder (expected a session or a WAV set folder)",
                p.display()
            );
        }
        return crate::app::run(cli.open, view, cli.run, cli.compare);
    };
    match command {
        Command::Analyze(a) => analyze(&a.input, &a.out, &a.setup, &a.modal),
        Command::Report(a) => report(a),
        Command::Import(a) => import(a),
        Command::Capture(a) => capture(a),
        Command::Devices => devices(),
        Command::Model(a) => model(a),
        Command::Plan(a) => model_cmds::plan(a),
        Command::Correlate(a) => correlate(a),
        Command::Check(a) => test_cmds::check(a),
        Command::Compare(a) => test_cmds::compare(a),
        Command::ReportDetails(a) => test_cmds::report_details(a),
        Command::Margin(a) => margin(a),
        Command::Calibrate(a) => calibrate(a),
        Command::Bearing(a) => bearing(a),
        Command::Rotor(a) => rotor(a),
        Command::Coastdown(a) => coastdown(a),
        Command::RecordRun(a) => record_run(a),
        Command::Verdict(a) => verdict(a),
        Command::Simulate(a) => simulate(a),
        Command::BenchVerdict(a) => bench_verdict(&a),
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

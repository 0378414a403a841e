//! The window's run recording: a thread that owns the input stream and the recorder, reports
//! progress a few times a second, and says where the run was saved once it is on disk.

use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, SyncSender};
use std::time::Duration;

use crate::capture::run::{AutoStop, RunProgress, RunRecordOptions, RunRecorder};

/// How to start.
#[derive(Debug, Clone)]
pub struct RecordStart {
    /// Device id, or `generator`.
    pub device: String,
    /// The final file (must not exist).
    pub out: PathBuf,
    /// Device inputs of the tach and the vibration.
    pub inputs: [usize; 2],
    /// Sample rate, Hz (`None`: the device's default).
    pub rate_hz: Option<u32>,
    /// Frames per callback.
    pub buffer_frames: u32,
    /// Tach pulses per revolution.
    pub pulses_per_rev: usize,
    /// When to stop by itself.
    pub auto: AutoStop,
}

/// What the thread reports.
#[derive(Debug, Clone, PartialEq)]
pub enum RecordReport {
    /// Recording, with this progress.
    Progress(RunProgress),
    /// The run is on disk, complete.
    Saved(PathBuf),
    /// It stopped on an error (what was recorded is saved where the message says).
    Failed(String),
}

/// Handle held by the window.
pub struct RecordHandle {
    /// Set to stop.
    pub stop: Arc<AtomicBool>,
    /// Reports.
    pub reports: Receiver<RecordReport>,
}

/// Starts the `tapgrid-run-record` thread.
pub fn start(s: RecordStart, repaint: impl Fn() + Send + 'static) -> RecordHandle {
    let stop = Arc::new(AtomicBool::new(false));
    let (tx, reports) = std::sync::mpsc::sync_channel(64);
    let flag = stop.clone();
    let _ = std::thread::Builder::new()
        .name("tapgrid-run-record".into())
        .spawn(move || {
            let r = record(&s, &flag, &tx, &repaint);
            let _ = tx.send(match r {
                Ok(p) => RecordReport::Saved(p),
                Err(e) => RecordReport::Failed(e),
            });
            repaint();
        });
    RecordHandle { stop, reports }
}

fn record(
    s: &RecordStart,
    stop: &AtomicBool,
    tx: &SyncSender<RecordReport>,
    repaint: &impl Fn(),
) -> Result<PathBuf, String> {
    if let Some(dir) = s.out.parent() {
        std::fs::create_dir_all(dir)
            .map_err(|e| format!("{}: cannot create the folder: {e}", dir.display()))?;
        crate::capture::run::recover(dir).map_err(|e| e.to_string())?;
    }
    let mut source = crate::capture::open_run_source(
        &s.device,
        s.inputs,
        s.rate_hz,
        Some(s.buffer_frames.max(32)),
    )
    .map_err(|e| e.to_string())?;
    let rec = RunRecorder::create(
        &s.out,
        source.sample_rate_hz(),
        RunRecordOptions {
            segment_s: 2.0,
            pulses_per_rev: s.pulses_per_rev,
        },
    )
    .map_err(|e| e.to_string())?;
    crate::capture::run::record(
        source.as_mut(),
        rec,
        s.auto,
        Duration::from_secs(3),
        || stop.load(Ordering::Relaxed),
        |p| {
            // A full channel drops a progress report, never a sample.
            let _ = tx.try_send(RecordReport::Progress(*p));
            repaint();
        },
    )
    .map_err(|e| e.to_string())
}

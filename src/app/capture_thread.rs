//! The capture thread of the window: owns the input stream and the engine, takes controls, and
//! sends every event (after its hit is on disk) back over a bounded channel.

use std::path::PathBuf;
use std::sync::mpsc::{Receiver, Sender, SyncSender, TryRecvError};
use std::time::Duration;

use crate::acquire::source::{Source, SourceError};
use crate::capture::{CaptureError, Engine, Event};
use crate::session::Part;
use crate::setup::Setup;

/// What the person asks of the capture.
#[derive(Debug, Clone, PartialEq)]
pub enum Control {
    /// Arm a station.
    Arm(u32),
    /// Reject the last hit.
    Undo,
    /// Start the station again.
    Redo,
    /// Accepted hits per station, and whether to arm the next one when done.
    Plan(usize, bool),
    /// Stop and close the device.
    Stop,
}

/// What the thread reports.
#[derive(Debug)]
pub enum Report {
    /// An engine event.
    Event(Event),
    /// Capture ended; `Err` says why (every hit reported before it is saved).
    Ended(Result<(), String>),
}

/// How to start.
#[derive(Debug, Clone)]
pub struct Start {
    /// Device id, or `generator`.
    pub device: String,
    /// Session folder.
    pub session: PathBuf,
    /// Setup for a new session.
    pub setup: Setup,
    /// Part for a new session.
    pub part: Part,
    /// First station.
    pub station: u32,
    /// Accepted hits that finish a station.
    pub hits: usize,
    /// Arm the next station when one is done.
    pub auto_advance: bool,
}

/// Handle held by the UI.
pub struct CaptureHandle {
    /// Controls.
    pub controls: Sender<Control>,
    /// Reports.
    pub reports: Receiver<Report>,
}

/// Starts the `tapgrid-capture` thread.
pub fn start(s: Start, repaint: impl Fn() + Send + 'static) -> CaptureHandle {
    let (controls, control_rx) = std::sync::mpsc::channel();
    let (tx, reports) = std::sync::mpsc::sync_channel(256);
    let _ = std::thread::Builder::new()
        .name("tapgrid-capture".into())
        .spawn(move || {
            let r = run(s, control_rx, &tx, &repaint);
            let _ = tx.send(Report::Ended(r.map_err(|e| e.to_string())));
            repaint();
        });
    CaptureHandle { controls, reports }
}

fn run(
    s: Start,
    controls: Receiver<Control>,
    tx: &SyncSender<Report>,
    repaint: &impl Fn(),
) -> Result<(), CaptureError> {
    let mut source: Box<dyn Source> = if s.device == "generator" {
        Box::new(crate::capture::generator::Generator::new(
            51_200, 1.5, 36_000.0, 1024, true,
        ))
    } else {
        Box::new(crate::acquire::live::LiveInput::open(
            &crate::acquire::live::OpenOptions {
                id: s.device.clone(),
                channels: [s.setup.channel_a.index, s.setup.channel_b.index],
                sample_rate_hz: None,
                buffer_frames: Some(1024),
            },
        )?)
    };
    let mut engine = Engine::open(&s.session, s.setup, s.part, source.sample_rate_hz())?;
    let send = |r: Report| {
        // Levels may be dropped when the UI is behind; hits and ends never are.
        let _ = tx.send(r);
        repaint();
    };
    send(Report::Event(engine.arm(s.station, None)?));
    let mut buf = Vec::with_capacity(8192);
    let mut silent = 0u32;
    let (mut hits, mut advance) = (s.hits.max(1), s.auto_advance);
    let mut done = false;
    loop {
        match controls.try_recv() {
            Ok(Control::Stop) | Err(TryRecvError::Disconnected) => return Ok(()),
            Ok(Control::Plan(h, a)) => {
                hits = h.max(1);
                advance = a;
            }
            Ok(Control::Arm(st)) => {
                done = false;
                send(Report::Event(engine.arm(st, None)?));
            }
            Ok(Control::Undo) => {
                if let Some(h) = engine.undo_last()? {
                    send(Report::Event(Event::Hit(Box::new(h))));
                }
            }
            Ok(Control::Redo) => {
                done = false;
                send(Report::Event(engine.redo_station()?));
            }
            Err(TryRecvError::Empty) => {}
        }
        buf.clear();
        source.read(&mut buf, Duration::from_millis(20))?;
        if buf.is_empty() {
            silent += 1;
            if silent > 150 {
                return Err(CaptureError::Source(SourceError::Lost(
                    "no samples for 3 s: the device stopped delivering (unplugged?)".into(),
                )));
            }
            continue;
        }
        silent = 0;
        for ev in engine.push(&buf)? {
            match ev {
                Event::Levels { .. } => {
                    let _ = tx.try_send(Report::Event(ev));
                    repaint();
                }
                other => send(Report::Event(other)),
            }
        }
        if let Some(ev) = engine.health_event(source.health()) {
            send(Report::Event(ev));
        }
        if !done
            && engine.accepted() >= hits
            && let Some(st) = engine.station()
        {
            done = true;
            send(Report::Event(Event::StationDone {
                station: st,
                accepted: engine.accepted(),
            }));
            if advance {
                done = false;
                send(Report::Event(engine.arm(st + 1, None)?));
            }
        }
    }
}

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
    /// Station order for auto-advance.
    Order(Vec<u32>),
    /// Stop and close the device.
    Stop,
}

/// What the thread reports.
#[derive(Debug)]
pub enum Report {
    /// An engine event.
    Event(Event),
    /// The device went away; capture resumes when it returns.
    Waiting(String),
    /// The last station of the plan has its hits: nothing more is armed.
    PlanDone,
    /// Undo found no hit to reject.
    NothingToUndo,
    /// Capture ended; `Err` says why (every hit reported before it is saved).
    Ended(Result<(), String>),
}

fn engine_rate(engine: &Engine, fallback: u32) -> u32 {
    engine
        .session()
        .manifest
        .recordings
        .first()
        .map_or(fallback, |r| r.sample_rate_hz)
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
    /// Order of the stations for auto-advance.
    pub order: Vec<u32>,
    /// Sample rate, Hz (`None`: the device's default).
    pub rate_hz: Option<u32>,
    /// Frames per callback.
    pub buffer_frames: u32,
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

fn open_source(s: &Start) -> Result<Box<dyn Source>, SourceError> {
    crate::capture::open_source(
        &s.device,
        [s.setup.channel_a.index, s.setup.channel_b.index],
        s.rate_hz,
        Some(s.buffer_frames.max(32)),
    )
}

/// Next station after `st` in the plan `order`: `None` after its last station (the plan is
/// done); `st + 1` when there is no plan or `st` is not in it.
pub fn next_station(order: &[u32], st: u32) -> Option<u32> {
    match order.iter().position(|&x| x == st) {
        Some(i) if i + 1 < order.len() => Some(order[i + 1]),
        Some(_) => None,
        None => Some(st + 1),
    }
}

/// Reads a station order such as `1-10`, `10-1` or `1,3,5-7`; `None` when it cannot.
pub fn parse_order(text: &str) -> Option<Vec<u32>> {
    let mut out = Vec::new();
    for part in text.split(',').map(str::trim).filter(|p| !p.is_empty()) {
        match part.split_once('-') {
            Some((a, b)) => {
                let (a, b): (u32, u32) = (a.trim().parse().ok()?, b.trim().parse().ok()?);
                if a <= b {
                    out.extend(a..=b);
                } else {
                    out.extend((b..=a).rev());
                }
            }
            None => out.push(part.parse().ok()?),
        }
    }
    (!out.is_empty()).then_some(out)
}

fn run(
    mut s: Start,
    controls: Receiver<Control>,
    tx: &SyncSender<Report>,
    repaint: &impl Fn(),
) -> Result<(), CaptureError> {
    let mut source = open_source(&s)?;
    let mut engine = Engine::open(
        &s.session,
        s.setup.clone(),
        s.part.clone(),
        source.sample_rate_hz(),
    )?;
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
            Ok(Control::Order(o)) => s.order = o,
            Ok(Control::Plan(h, a)) => {
                hits = h.max(1);
                advance = a;
            }
            Ok(Control::Arm(st)) => {
                done = false;
                send(Report::Event(engine.arm(st, None)?));
            }
            Ok(Control::Undo) => {
                let before = engine.station();
                let undone = engine.undo_last()?;
                if engine.station() != before
                    && let Some(st) = engine.station()
                {
                    // Back on the station whose hit was undone, to replace it.
                    done = false;
                    send(Report::Event(Event::Armed {
                        station: st,
                        accepted: engine.accepted(),
                    }));
                }
                match undone {
                    Some(h) => {
                        done = false;
                        send(Report::Event(Event::Hit(Box::new(h))));
                    }
                    None => send(Report::NothingToUndo),
                }
            }
            Ok(Control::Redo) => {
                done = false;
                send(Report::Event(engine.redo_station()?));
            }
            Err(TryRecvError::Empty) => {}
        }
        buf.clear();
        let read = source.read(&mut buf, Duration::from_millis(20));
        let lost = match read {
            Err(SourceError::Lost(m)) => Some(m),
            Err(e) => return Err(e.into()),
            Ok(()) if buf.is_empty() => {
                silent += 1;
                (silent > 150).then(|| {
                    "no samples for 3 s: the device stopped delivering (unplugged?)".to_string()
                })
            }
            Ok(()) => None,
        };
        if let Some(why) = lost {
            // What was saved stays saved. Wait for the device to come back, then continue the
            // station where it was (its recording so far is loaded again on arming).
            drop(source);
            let st = engine.station().unwrap_or(s.station);
            send(Report::Waiting(format!(
                "{why} — waiting for it to come back"
            )));
            source = loop {
                match controls.recv_timeout(Duration::from_secs(1)) {
                    Ok(Control::Stop) | Err(std::sync::mpsc::RecvTimeoutError::Disconnected) => {
                        return Ok(());
                    }
                    _ => {}
                }
                if let Ok(src) = open_source(&s)
                    && src.sample_rate_hz() == engine_rate(&engine, src.sample_rate_hz())
                {
                    break src;
                }
            };
            silent = 0;
            send(Report::Event(engine.arm(st, None)?));
            continue;
        }
        if buf.is_empty() {
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
                match next_station(&s.order, st) {
                    Some(next) => {
                        done = false;
                        send(Report::Event(engine.arm(next, None)?));
                    }
                    None => send(Report::PlanDone),
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn station_orders() {
        assert_eq!(parse_order("1-4"), Some(vec![1, 2, 3, 4]));
        assert_eq!(parse_order("4-2, 7"), Some(vec![4, 3, 2, 7]));
        assert_eq!(parse_order("x"), None);
        assert_eq!(parse_order(""), None);
        let o = parse_order("10-8,1").unwrap_or_default();
        assert_eq!(next_station(&o, 10), Some(9));
        assert_eq!(next_station(&o, 8), Some(1));
        assert_eq!(next_station(&o, 1), None); // the plan's last station: done
        assert_eq!(next_station(&o, 5), Some(6)); // not in the plan: ascending
        assert_eq!(next_station(&[], 5), Some(6));
    }
}

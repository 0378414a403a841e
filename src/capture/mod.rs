//! The capture engine: samples from a [`Source`] → trigger → completed records → the station's
//! verdicts and running FRF → saved, atomically, before anyone is told a hit was kept.
//!
//! The station being tapped is kept as one continuous recording from the moment it was armed,
//! exactly like a WAV-set file, so the verdicts, carried-over ringing and AC coupling are judged
//! by the same code as a replayed test. After each completed record the recording so far is
//! written as a new file (`raw/station-NNN-tT-SSS.wav`, float32, bit-exact), the manifest is
//! switched to it atomically, and only then the superseded file (a byte-identical prefix of the
//! new one) is removed and the hit reported. A kill at any instant leaves the manifest pointing
//! at a complete file: at most the hit in flight is lost.

pub mod generator;
pub mod run;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use crate::acquire::source::{Health, Source, SourceError};
use crate::acquire::wav::{SampleEncoding, probe, write_channels};
use crate::acquire::wavset::PositionSource;
use crate::session::{Part, Recording, Session, Station};
use crate::setup::{Setup, TriggerLevel};
use crate::signal::hits::robust_noise_rms;
use crate::signal::{Reason, SpectrumPlan, StationFrf, analyze_station};

/// What the capture reports.
#[derive(Debug, Clone, PartialEq)]
pub enum Event {
    /// A station is armed: tap it.
    Armed {
        /// Station.
        station: u32,
        /// Hits already accepted on it (a continued station).
        accepted: usize,
    },
    /// Peak levels since the last report, fraction of full scale.
    Levels {
        /// Channel A peak.
        peak_a_fs: f32,
        /// Channel B peak.
        peak_b_fs: f32,
    },
    /// A hit, saved to disk before this event was sent.
    Hit(Box<HitEvent>),
    /// The station has its accepted hits.
    StationDone {
        /// Station.
        station: u32,
        /// Accepted hits.
        accepted: usize,
    },
    /// Overruns or stream errors increased.
    Health(Health),
}

/// A saved hit.
#[derive(Debug, Clone, PartialEq)]
pub struct HitEvent {
    /// Station.
    pub station: u32,
    /// Index within the station's recording.
    pub index: usize,
    /// Trigger time in the station's recording, s.
    pub time_s: f64,
    /// Kept in the average.
    pub accepted: bool,
    /// Why not.
    pub reasons: Vec<Reason>,
    /// The verdict is a person's (undo), not the automatic one.
    pub by_person: bool,
    /// First sample of its record in the station's recording.
    pub record_start: usize,
    /// Samples in the record.
    pub record_samples: usize,
    /// FNV-1a hash of the record's samples (A then B, f32 bits) as saved.
    pub checksum: u64,
    /// From the record's last sample arriving to this event, s.
    pub latency_s: f64,
    /// The station's FRF over its accepted hits so far.
    pub frf: Option<StationFrf>,
    /// Accepted hits on the station so far.
    pub accepted_so_far: usize,
    /// The session file holding it.
    pub file: String,
}

/// Why capture stopped.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CaptureError {
    /// The input failed.
    #[error("{0}")]
    Source(#[from] SourceError),
    /// Saving failed; nothing after the last reported hit was kept.
    #[error("{0}; capture stopped, every hit reported before this is saved")]
    Save(String),
    /// Bad settings.
    #[error("{0}")]
    Setup(String),
}

/// FNV-1a over the f32 bit patterns of both channels (a cheap check that two copies agree).
pub fn checksum(a: &[f32], b: &[f32]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for v in a.iter().chain(b) {
        for byte in v.to_bits().to_le_bytes() {
            h ^= byte as u64;
            h = h.wrapping_mul(0x0000_0100_0000_01b3);
        }
    }
    h
}

/// The engine for one session.
pub struct Engine {
    /// Held for the whole capture: the engine is the session's only writer meanwhile.
    _lock: crate::session::lock::SessionLock,
    session: Session,
    setup: Setup,
    rate: u32,
    station: Option<u32>,
    a: Vec<f32>,
    b: Vec<f32>,
    scan_from: usize,
    holdoff_until: usize,
    waiting: Vec<(usize, Instant)>,
    reported: usize,
    overrides: BTreeMap<usize, bool>,
    take: u32,
    seq: u32,
    file: Option<String>,
    plan: Option<SpectrumPlan>,
    level: f64,
    level_at: usize,
    peak: [f32; 2],
    last_levels: Instant,
    health: Health,
    accepted: usize,
    /// Station of the last hit reported, so undo still reaches it after auto-advance armed the
    /// next station.
    last_hit_station: Option<u32>,
}

impl Engine {
    /// Opens the session at `dir`, or creates it with `setup` and `part`. An existing session's
    /// setup is used as saved (so a continued test stays consistent).
    pub fn open(dir: &Path, setup: Setup, part: Part, rate: u32) -> Result<Self, CaptureError> {
        let lock_wait = std::time::Duration::from_secs(2);
        let mut lock = None;
        let session = if Session::is_session(dir) {
            lock = Some(
                crate::session::lock::SessionLock::acquire(dir, "capture", lock_wait)
                    .map_err(|e| CaptureError::Setup(e.to_string()))?,
            );
            let s = Session::open(dir).map_err(|e| CaptureError::Setup(e.to_string()))?;
            if let Some(r) = s.manifest.recordings.first()
                && r.sample_rate_hz != rate
            {
                return Err(CaptureError::Setup(format!(
                    "{}: the session was recorded at {} Hz, the device runs at {rate} Hz",
                    dir.display(),
                    r.sample_rate_hz
                )));
            }
            s
        } else {
            Session::create(dir, setup, part).map_err(|e| CaptureError::Save(e.to_string()))?
        };
        let lock = match lock {
            Some(l) => l,
            None => crate::session::lock::SessionLock::acquire(dir, "capture", lock_wait)
                .map_err(|e| CaptureError::Setup(e.to_string()))?,
        };
        let setup = session.manifest.setup.clone();
        setup
            .validate()
            .map_err(|m| CaptureError::Setup(format!("bad setup: {m}")))?;
        Ok(Self {
            _lock: lock,
            session,
            setup,
            rate,
            station: None,
            a: Vec::new(),
            b: Vec::new(),
            scan_from: 1,
            holdoff_until: 0,
            waiting: Vec::new(),
            reported: 0,
            overrides: BTreeMap::new(),
            take: 1,
            seq: 0,
            file: None,
            plan: None,
            level: 0.0,
            level_at: 0,
            peak: [0.0; 2],
            last_levels: Instant::now(),
            health: Health::default(),
            accepted: 0,
            last_hit_station: None,
        })
    }

    /// The session as saved.
    pub fn session(&self) -> &Session {
        &self.session
    }

    /// Station armed.
    pub fn station(&self) -> Option<u32> {
        self.station
    }

    /// Accepted hits on the armed station.
    pub fn accepted(&self) -> usize {
        self.accepted
    }

    fn record_len(&self) -> (usize, usize) {
        let n = self.setup.record_samples(self.rate);
        let pre = ((self.setup.trigger.pretrigger_fraction * n as f64).round() as usize).min(n - 1);
        (n, pre)
    }

    /// Arms a station. A station that already has a recording in the session is continued:
    /// its samples so far come first, so earlier hits keep their verdicts.
    pub fn arm(&mut self, station: u32, position_m: Option<f64>) -> Result<Event, CaptureError> {
        self.station = Some(station);
        self.a.clear();
        self.b.clear();
        self.overrides = self
            .session
            .overrides()
            .remove(&station)
            .unwrap_or_default();
        self.file = None;
        self.take = 1;
        self.seq = 0;
        self.reported = 0;
        self.accepted = 0;
        if let Some(rec) = self
            .session
            .manifest
            .recordings
            .iter()
            .find(|r| r.station == station)
            .cloned()
        {
            let path = self.session.dir.join(&rec.file);
            let two = crate::acquire::wav::read_two_channels(&path, 0, 1)
                .map_err(|e| CaptureError::Setup(e.to_string()))?;
            self.a = two.a.iter().map(|&v| v as f32).collect();
            self.b = two.b.iter().map(|&v| v as f32).collect();
            self.file = Some(rec.file.clone());
            if let Some((t, s)) = parse_take(&rec.file) {
                self.take = t;
                self.seq = s;
            }
            let hits: Vec<_> = self
                .session
                .manifest
                .hits
                .iter()
                .filter(|h| h.station == station)
                .collect();
            self.reported = hits.len();
            self.accepted = hits.iter().filter(|h| h.accepted).count();
        }
        if !self
            .session
            .manifest
            .stations
            .iter()
            .any(|s| s.station == station)
        {
            let (pos, src) = match position_m {
                Some(p) => (p, PositionSource::Csv),
                None => (
                    station as f64 * self.setup.spacing_m,
                    PositionSource::Spacing,
                ),
            };
            self.session.manifest.stations.push(Station {
                station,
                position_m: pos,
                position_source: src,
                label: None,
            });
            self.session.manifest.stations.sort_by_key(|s| s.station);
        }
        // Continue scanning after the saved samples; the hold-off guards their last hit.
        let (n, pre) = self.record_len();
        self.scan_from = self.a.len().max(1);
        self.holdoff_until = if self.a.is_empty() {
            0
        } else {
            self.a.len() + pre.min(n)
        };
        self.waiting.clear();
        self.level = 0.0;
        self.level_at = 0;
        Ok(Event::Armed {
            station,
            accepted: self.accepted,
        })
    }

    /// Starts the armed station again from nothing (a new take); the earlier take's file stays on
    /// disk, the manifest forgets its hits.
    pub fn redo_station(&mut self) -> Result<Event, CaptureError> {
        let st = self
            .station
            .ok_or_else(|| CaptureError::Setup("no station is armed".into()))?;
        self.session.manifest.recordings.retain(|r| r.station != st);
        self.session.manifest.hits.retain(|h| h.station != st);
        self.session
            .save()
            .map_err(|e| CaptureError::Save(e.to_string()))?;
        let next_take = self.take + 1;
        let ev = self.arm(st, None)?;
        self.take = next_take;
        Ok(ev)
    }

    /// Rejects the last hit (a person's override), saved at once. When auto-advance has already
    /// armed the next station and it holds no hit yet, the station of that last hit is armed
    /// again so its rejected hit can be replaced.
    pub fn undo_last(&mut self) -> Result<Option<HitEvent>, CaptureError> {
        if self.reported == 0
            && let Some(prev) = self.last_hit_station
            && Some(prev) != self.station
        {
            self.arm(prev, None)?;
        }
        if self.reported == 0 {
            return Ok(None);
        }
        let last = self.reported - 1;
        self.overrides.insert(last, false);
        self.analyse_and_save(Instant::now(), Some(last))
    }

    /// Feeds frames; returns what happened. Saving happens inside, before a hit is returned.
    pub fn push(&mut self, frames: &[[f32; 2]]) -> Result<Vec<Event>, CaptureError> {
        let now = Instant::now();
        let mut events = Vec::new();
        for f in frames {
            self.peak[0] = self.peak[0].max(f[0].abs());
            self.peak[1] = self.peak[1].max(f[1].abs());
        }
        if now.duration_since(self.last_levels) >= Duration::from_millis(50) {
            events.push(Event::Levels {
                peak_a_fs: self.peak[0],
                peak_b_fs: self.peak[1],
            });
            self.peak = [0.0; 2];
            self.last_levels = now;
        }
        if self.station.is_none() {
            return Ok(events);
        }
        self.a.extend(frames.iter().map(|f| f[0]));
        self.b.extend(frames.iter().map(|f| f[1]));
        let (n, pre) = self.record_len();
        self.update_level();
        let s = self.setup.trigger.slope.sign() as f32;
        let level = self.level as f32;
        let holdoff = self
            .setup
            .trigger
            .holdoff_s
            .map(|h| (h * self.rate as f64).round() as usize)
            .unwrap_or(n - pre)
            .max(1);
        let mut i = self.scan_from.max(1);
        while i < self.a.len() {
            if i >= self.holdoff_until && s * self.a[i - 1] < level && s * self.a[i] >= level {
                self.waiting.push((i, now));
                self.holdoff_until = i + holdoff;
                i = self.holdoff_until;
            } else {
                i += 1;
            }
        }
        self.scan_from = i.min(self.a.len()).max(1);
        // A record is complete once its post-trigger part has arrived.
        let mut done = None;
        while let Some(&(t, seen)) = self.waiting.first() {
            if t + (n - pre) <= self.a.len() {
                // The moment its last sample arrived is within this chunk.
                done = Some(seen.max(now));
                self.waiting.remove(0);
            } else {
                break;
            }
        }
        if let Some(t_done) = done {
            // Several records may complete in one chunk (a slow disk, a burst): report them all.
            while let Some(ev) = self.analyse_and_save(t_done, None)? {
                events.push(Event::Hit(Box::new(ev)));
            }
        }
        Ok(events)
    }

    fn update_level(&mut self) {
        self.level = match self.setup.trigger.level {
            TriggerLevel::FractionOfRange(f) => f,
            TriggerLevel::NoiseMultiple(k) => {
                // Re-estimate the noise floor at most once a second of new samples.
                if self.level == 0.0 || self.a.len() >= self.level_at + self.rate as usize {
                    self.level_at = self.a.len();
                    let tail = &self.a[self.a.len().saturating_sub(4 * self.rate as usize)..];
                    let x: Vec<f64> = tail.iter().map(|&v| v as f64).collect();
                    k * robust_noise_rms(&x)
                } else {
                    self.level
                }
            }
        };
    }

    /// Analyses the station's recording so far, saves it, and returns the newest complete hit
    /// not yet reported (or the hit `changed`, after an override).
    fn analyse_and_save(
        &mut self,
        t_done: Instant,
        changed: Option<usize>,
    ) -> Result<Option<HitEvent>, CaptureError> {
        let Some(station) = self.station else {
            return Ok(None);
        };
        let a: Vec<f64> = self.a.iter().map(|&v| v as f64).collect();
        let b: Vec<f64> = self.b.iter().map(|&v| v as f64).collect();
        let (n, _) = self.record_len();
        let res = match analyze_station(
            &a,
            &b,
            self.rate,
            &self.setup,
            &self.overrides,
            &mut self.plan,
        ) {
            Ok(r) => r,
            // The engine's trigger fired but the chain's did not (a noise-relative level that
            // moved): nothing to report yet.
            Err(_) => return Ok(None),
        };
        // Hits whose record is still arriving are not reported yet.
        let (_, pre) = self.record_len();
        let complete: Vec<_> = res
            .hits
            .iter()
            .filter(|h| match h.record_start {
                Some(s) => s + n <= a.len(),
                // Too near the start to have its pretrigger: final. Near the end: still arriving.
                None => ((h.time_s * self.rate as f64).round() as usize) < pre,
            })
            .cloned()
            .collect();
        let newest = match changed {
            Some(i) => complete.get(i).cloned(),
            None => complete.get(self.reported).cloned(),
        };
        let Some(hit) = newest else {
            return Ok(None);
        };
        // Save: the recording so far under a new name, then the manifest, then drop the old file.
        self.seq += 1;
        let file = format!(
            "raw/station-{station:03}-t{}-{:03}.wav",
            self.take, self.seq
        );
        let path = self.session.dir.join(&file);
        let save = |e: String| CaptureError::Save(e);
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent)
                .map_err(|e| save(format!("{}: cannot create folder: {e}", parent.display())))?;
        }
        write_channels(&path, self.rate, SampleEncoding::Float32, &[&a, &b])
            .map_err(|e| save(e.to_string()))?;
        let info = probe(&path).map_err(|e| save(e.to_string()))?;
        let bytes = std::fs::metadata(&path)
            .map_err(|e| save(format!("{}: {e}", path.display())))?
            .len();
        let mut manifest = self.session.manifest.clone();
        manifest.recordings.retain(|r| r.station != station);
        manifest.recordings.push(Recording {
            station,
            file: file.clone(),
            sample_rate_hz: self.rate,
            channels: 2,
            encoding: SampleEncoding::Float32,
            frames: info.frames,
            bytes,
        });
        manifest.recordings.sort_by_key(|r| r.station);
        manifest.hits.retain(|h| h.station != station);
        for h in &complete {
            manifest.hits.push(crate::session::SavedHit {
                station,
                index: h.index,
                time_s: h.time_s,
                accepted: h.accepted,
                reasons: h.reasons.clone(),
                override_accept: h.override_accept,
            });
        }
        let candidate = Session {
            dir: self.session.dir.clone(),
            manifest,
        };
        if let Err(e) = candidate.save() {
            // The manifest still names the previous file: the new one is an orphan.
            let _ = std::fs::remove_file(&path);
            return Err(save(e.to_string()));
        }
        self.session = candidate;
        if let Some(old) = self.file.replace(file.clone())
            && old != file
        {
            let _ = std::fs::remove_file(self.session.dir.join(old));
        }
        if changed.is_none() {
            self.reported += 1;
            self.last_hit_station = Some(station);
        }
        self.accepted = complete.iter().filter(|h| h.accepted).count();
        let start = hit.record_start.unwrap_or(0);
        let end = (start + n).min(self.a.len());
        Ok(Some(HitEvent {
            station,
            index: hit.index,
            time_s: hit.time_s,
            accepted: hit.accepted,
            reasons: hit.reasons.clone(),
            by_person: hit.override_accept.is_some(),
            record_start: start,
            record_samples: end - start,
            checksum: checksum(&self.a[start..end], &self.b[start..end]),
            latency_s: t_done.elapsed().as_secs_f64(),
            frf: res.frf,
            accepted_so_far: self.accepted,
            file,
        }))
    }

    /// Health counters changed: the event to send.
    pub fn health_event(&mut self, h: Health) -> Option<Event> {
        (h != self.health).then(|| {
            self.health = h;
            Event::Health(h)
        })
    }
}

fn parse_take(file: &str) -> Option<(u32, u32)> {
    let stem = Path::new(file).file_stem()?.to_str()?;
    let mut parts = stem.rsplit('-');
    let seq = parts.next()?.parse().ok()?;
    let take = parts.next()?.strip_prefix('t')?.parse().ok()?;
    Some((take, seq))
}

/// Device id of the built-in synthetic source.
pub const GENERATOR_ID: &str = "generator";

/// Opens a capture source: a live device by id, or the synthetic [`generator`] (taps every
/// 1.5 s, paced at the sample rate, 51.2 kHz unless a rate is given).
pub fn open_source(
    device: &str,
    channels: [usize; 2],
    rate_hz: Option<u32>,
    buffer_frames: Option<u32>,
) -> Result<Box<dyn Source>, SourceError> {
    Ok(if device == GENERATOR_ID {
        Box::new(generator::Generator::new(
            rate_hz.unwrap_or(51_200),
            1.5,
            10.0 * 3600.0,
            1024,
            true,
        ))
    } else {
        Box::new(crate::acquire::live::LiveInput::open(
            &crate::acquire::live::OpenOptions {
                id: device.to_string(),
                channels,
                sample_rate_hz: rate_hz,
                buffer_frames,
            },
        )?)
    })
}

/// Opens a source for recording a run: a live device by id (channel 0 of what it gives is
/// `channels[0]`, the tach), or the synthetic coast-down [`generator::RunGenerator`] (paced,
/// 48 kHz unless a rate is given).
pub fn open_run_source(
    device: &str,
    channels: [usize; 2],
    rate_hz: Option<u32>,
    buffer_frames: Option<u32>,
) -> Result<Box<dyn Source>, SourceError> {
    if device == GENERATOR_ID {
        Ok(Box::new(generator::RunGenerator::new(
            rate_hz.unwrap_or(48_000),
            1024,
            true,
        )))
    } else {
        open_source(device, channels, rate_hz, buffer_frames)
    }
}

/// What a headless capture is to do.
#[derive(Debug, Clone)]
pub struct Plan {
    /// Stations in the order to tap them.
    pub stations: Vec<u32>,
    /// Accepted hits each station needs.
    pub hits: usize,
    /// Positions, m, when known.
    pub positions_m: BTreeMap<u32, f64>,
    /// Give up when no samples arrive for this long.
    pub stall: Duration,
}

/// Runs the plan: arms each station in turn and feeds the engine until every station has its
/// hits. `on_event` sees every event (after the hit is on disk). Returns the session folder.
pub fn run(
    source: &mut dyn Source,
    engine: &mut Engine,
    plan: &Plan,
    mut on_event: impl FnMut(&Event),
) -> Result<PathBuf, CaptureError> {
    let mut buf = Vec::with_capacity(8192);
    for &st in &plan.stations {
        let ev = engine.arm(st, plan.positions_m.get(&st).copied())?;
        on_event(&ev);
        let mut last_data = Instant::now();
        while engine.accepted() < plan.hits {
            buf.clear();
            source.read(&mut buf, Duration::from_millis(20))?;
            if buf.is_empty() {
                if last_data.elapsed() > plan.stall {
                    return Err(CaptureError::Source(SourceError::Lost(format!(
                        "no samples for {:.1} s: the device stopped delivering (unplugged?)",
                        plan.stall.as_secs_f64()
                    ))));
                }
                continue;
            }
            last_data = Instant::now();
            for ev in engine.push(&buf)? {
                on_event(&ev);
            }
            if let Some(ev) = engine.health_event(source.health()) {
                on_event(&ev);
            }
        }
        on_event(&Event::StationDone {
            station: st,
            accepted: engine.accepted(),
        });
    }
    Ok(engine.session().dir.clone())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::capture::generator::Generator;

    /// Every hit the generator makes is saved, in order, and the saved recording holds exactly
    /// the samples fed (bit for bit, through float32 WAV).
    #[test]
    fn generator_hits_are_saved_bit_exact() {
        let dir = tempfile::tempdir().expect("temp");
        let session = dir.path().join("s");
        let rate = 16_000;
        let mut src = Generator::new(rate, 1.5, 8.0, 1000, false);
        let mut eng =
            Engine::open(&session, Setup::default(), Part::default(), rate).expect("open");
        eng.arm(3, Some(0.25)).expect("arm");
        let mut fed: Vec<[f32; 2]> = Vec::new();
        let mut hits = Vec::new();
        let mut buf = Vec::new();
        loop {
            buf.clear();
            if src.read(&mut buf, Duration::ZERO).is_err() {
                break;
            }
            fed.extend_from_slice(&buf);
            for ev in eng.push(&buf).expect("push") {
                if let Event::Hit(h) = ev {
                    hits.push(h);
                }
            }
        }
        // Hits at 0.75, 2.25, 3.75, 5.25 and 6.75 s; records of 16384 samples (1.02 s) all fit.
        assert_eq!(hits.len(), 5);
        assert!(hits.iter().all(|h| h.accepted));
        let s = Session::open(&session).expect("reopens");
        assert_eq!(s.manifest.hits.len(), 5);
        assert_eq!(s.manifest.stations[0].position_m, 0.25);
        let rec = &s.manifest.recordings[0];
        let two =
            crate::acquire::wav::read_two_channels(&session.join(&rec.file), 0, 1).expect("wav");
        for h in &hits {
            let (st, n) = (h.record_start, h.record_samples);
            let a: Vec<f32> = fed[st..st + n].iter().map(|f| f[0]).collect();
            let b: Vec<f32> = fed[st..st + n].iter().map(|f| f[1]).collect();
            assert_eq!(checksum(&a, &b), h.checksum);
            let sa: Vec<f32> = two.a[st..st + n].iter().map(|&v| v as f32).collect();
            assert!(sa == a);
        }
        // Only the latest snapshot stays on disk.
        let files = std::fs::read_dir(session.join("raw")).expect("raw").count();
        assert_eq!(files, 1);
        // Undo rejects the last hit, saved at once.
        let undone = eng.undo_last().expect("undo").expect("a hit");
        assert!(!undone.accepted);
        assert!(undone.by_person, "a person's verdict, shown as such");
        let s = Session::open(&session).expect("reopens");
        assert_eq!(s.manifest.hits.iter().filter(|h| h.accepted).count(), 4);
        // After the next station is armed (as auto-advance does) and before it is tapped, undo
        // still reaches the last hit: station 3 is armed again with its 4th hit rejected.
        let undone = eng.undo_last().expect("undo").expect("a hit");
        assert_eq!((undone.station, undone.index), (3, 4));
        eng.arm(4, Some(0.5)).expect("arm next");
        let undone = eng.undo_last().expect("undo").expect("reaches station 3");
        assert_eq!((undone.station, undone.index), (3, 4));
        assert_eq!(eng.station(), Some(3));
        assert!(undone.by_person && !undone.accepted);
    }
}

//! A run-up or coast-down recorded live: tach and vibration, kept on disk as the run goes.
//!
//! A run lasts minutes, so rewriting one growing file (as a station's recording is) would cost
//! time proportional to the square of its length. The run is written instead as numbered
//! segment files of a few seconds each (float32, bit-exact, each one written atomically) in a
//! folder beside the final file, `NAME.wav.parts/`. Stopping joins them into `NAME.wav`
//! (atomically) and then removes the folder. A kill at any instant leaves every finished segment
//! on disk — at most the last few seconds are lost — and [`recover`] joins what a crash left the
//! next time a run is recorded into that folder.
//!
//! While it records, the speed is read from the tail of the tach channel so the person sees it
//! and a coast-down can stop itself once the machine has come down.

use std::collections::VecDeque;
use std::io::BufWriter;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use super::CaptureError;
use crate::acquire::source::{Source, SourceError};
use crate::session::{SavedRun, Session};

/// Extension of the folder of segments beside a run's final file.
pub const PARTS_SUFFIX: &str = ".parts";
/// Seconds of tach kept for the speed readout: two revolutions down to 30 rpm.
const TACH_TAIL_S: f64 = 4.0;

/// How a run is recorded.
#[derive(Debug, Clone, PartialEq)]
pub struct RunRecordOptions {
    /// Seconds per segment: the most a crash can lose.
    pub segment_s: f64,
    /// Tach pulses per revolution (for the speed readout).
    pub pulses_per_rev: usize,
}

impl Default for RunRecordOptions {
    fn default() -> Self {
        Self {
            segment_s: 2.0,
            pulses_per_rev: 1,
        }
    }
}

/// What the recorder reports as it goes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RunProgress {
    /// Seconds recorded (on disk or about to be).
    pub seconds: f64,
    /// Seconds safely on disk.
    pub seconds_saved: f64,
    /// Speed from the last revolutions, rpm (`None`: no pulse train in the last seconds).
    pub speed_rpm: Option<f64>,
    /// Highest speed read so far, rpm.
    pub top_rpm: f64,
    /// Peak of channel 0 (tach) and 1 (vibration) since the last report, fraction of full scale.
    pub peak_fs: [f32; 2],
}

/// Records one run.
pub struct RunRecorder {
    out: PathBuf,
    parts: PathBuf,
    rate: u32,
    options: RunRecordOptions,
    pending: Vec<[f32; 2]>,
    segment_frames: usize,
    segments: usize,
    frames_saved: u64,
    tach: VecDeque<f32>,
    since_speed: usize,
    progress: RunProgress,
}

fn io_err(path: &Path, what: &str, e: impl std::fmt::Display) -> CaptureError {
    CaptureError::Save(format!("{}: {what}: {e}", path.display()))
}

fn segment_name(k: usize) -> String {
    format!("segment-{k:06}.wav")
}

fn float_spec(rate: u32) -> hound::WavSpec {
    hound::WavSpec {
        channels: 2,
        sample_rate: rate,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    }
}

/// The folder of segments of the run whose final file is `out`.
pub fn parts_dir(out: &Path) -> PathBuf {
    let mut name = out
        .file_name()
        .map(|n| n.to_os_string())
        .unwrap_or_else(|| "run.wav".into());
    name.push(PARTS_SUFFIX);
    out.with_file_name(name)
}

/// A new run file name in `dir`: `run-YYYYMMDD-HHMMSS.wav` (UTC), numbered if taken.
pub fn new_run_path(dir: &Path) -> PathBuf {
    let base = format!("run-{}", crate::clock::utc_file_stamp());
    let mut p = dir.join(format!("{base}.wav"));
    let mut k = 2;
    while p.exists() || parts_dir(&p).exists() {
        p = dir.join(format!("{base}-{k}.wav"));
        k += 1;
    }
    p
}

impl RunRecorder {
    /// Starts a run whose final file will be `out` (which must not exist), at `rate` Hz.
    /// Channel 0 of what is pushed is the tach, channel 1 the vibration.
    pub fn create(out: &Path, rate: u32, options: RunRecordOptions) -> Result<Self, CaptureError> {
        if rate == 0 {
            return Err(CaptureError::Setup("sample rate 0 Hz".into()));
        }
        if !(options.segment_s.is_finite() && options.segment_s > 0.0) {
            return Err(CaptureError::Setup(
                "segment length must be a positive number of seconds".into(),
            ));
        }
        if out.exists() {
            return Err(CaptureError::Setup(format!(
                "{}: already exists; a run never overwrites a recording",
                out.display()
            )));
        }
        let parts = parts_dir(out);
        if parts.exists() {
            return Err(CaptureError::Setup(format!(
                "{}: segments of an unfinished run are there; recover them first",
                parts.display()
            )));
        }
        std::fs::create_dir_all(&parts)
            .map_err(|e| io_err(&parts, "cannot create the folder", e))?;
        let segment_frames = ((options.segment_s * f64::from(rate)).round() as usize).max(1);
        Ok(Self {
            out: out.to_path_buf(),
            parts,
            rate,
            options,
            pending: Vec::with_capacity(segment_frames),
            segment_frames,
            segments: 0,
            frames_saved: 0,
            tach: VecDeque::new(),
            since_speed: 0,
            progress: RunProgress {
                seconds: 0.0,
                seconds_saved: 0.0,
                speed_rpm: None,
                top_rpm: 0.0,
                peak_fs: [0.0; 2],
            },
        })
    }

    /// The final file's path.
    pub fn path(&self) -> &Path {
        &self.out
    }

    /// Sample rate, Hz.
    pub fn sample_rate_hz(&self) -> u32 {
        self.rate
    }

    /// Appends frames; a segment is written (atomically) each time one fills.
    pub fn push(&mut self, frames: &[[f32; 2]]) -> Result<(), CaptureError> {
        let tail = (TACH_TAIL_S * f64::from(self.rate)) as usize;
        for f in frames {
            self.pending.push(*f);
            self.tach.push_back(f[0]);
            self.progress.peak_fs[0] = self.progress.peak_fs[0].max(f[0].abs());
            self.progress.peak_fs[1] = self.progress.peak_fs[1].max(f[1].abs());
            if self.pending.len() >= self.segment_frames {
                self.write_segment()?;
            }
        }
        while self.tach.len() > tail {
            self.tach.pop_front();
        }
        self.since_speed += frames.len();
        // The speed four times a second: reading the tail costs a sort of a few seconds of data.
        if self.since_speed >= (self.rate as usize / 4).max(1) {
            self.since_speed = 0;
            self.progress.speed_rpm = self.speed_now();
            if let Some(s) = self.progress.speed_rpm {
                self.progress.top_rpm = self.progress.top_rpm.max(s);
            }
        }
        let total = self.frames_saved + self.pending.len() as u64;
        self.progress.seconds = total as f64 / f64::from(self.rate);
        self.progress.seconds_saved = self.frames_saved as f64 / f64::from(self.rate);
        Ok(())
    }

    /// Progress so far, peaks included (they keep growing until [`Self::take_progress`]).
    pub fn progress(&self) -> RunProgress {
        self.progress
    }

    /// Progress so far; the peaks restart from here.
    pub fn take_progress(&mut self) -> RunProgress {
        let p = self.progress;
        self.progress.peak_fs = [0.0; 2];
        p
    }

    fn speed_now(&self) -> Option<f64> {
        let x: Vec<f64> = self.tach.iter().map(|&v| f64::from(v)).collect();
        let r =
            crate::coast::tach::revolutions(&x, f64::from(self.rate), self.options.pulses_per_rev)
                .ok()?;
        let s = &r.start_s;
        if s.len() < 3 {
            return None;
        }
        // No revolution finished for twice the last period: the machine is stopping or stopped.
        let now = x.len() as f64 / f64::from(self.rate);
        let last = s[s.len() - 1] - s[s.len() - 2];
        if now - s[s.len() - 1] > 2.0 * last {
            return None;
        }
        let k = (s.len() - 1).min(3);
        Some(60.0 * k as f64 / (s[s.len() - 1] - s[s.len() - 1 - k]))
    }

    fn write_segment(&mut self) -> Result<(), CaptureError> {
        if self.pending.is_empty() {
            return Ok(());
        }
        let path = self.parts.join(segment_name(self.segments + 1));
        let spec = float_spec(self.rate);
        let frames = &self.pending;
        crate::atomic::write_with(&path, |file| {
            let map = |e: hound::Error| std::io::Error::other(e.to_string());
            let mut w = hound::WavWriter::new(BufWriter::new(file), spec).map_err(map)?;
            for f in frames {
                w.write_sample(f[0]).map_err(map)?;
                w.write_sample(f[1]).map_err(map)?;
            }
            w.finalize().map_err(map)
        })
        .map_err(|e| io_err(&path, "cannot write a segment of the run", e))?;
        self.segments += 1;
        self.frames_saved += self.pending.len() as u64;
        self.pending.clear();
        Ok(())
    }

    /// Writes what is pending, joins the segments into the final file and removes them.
    /// Returns the final file.
    pub fn finish(mut self) -> Result<PathBuf, CaptureError> {
        self.write_segment()?;
        join_parts(&self.parts, &self.out)?;
        Ok(self.out)
    }
}

/// Joins the segments in `parts` into `out` (atomically), then removes `parts`.
fn join_parts(parts: &Path, out: &Path) -> Result<u64, CaptureError> {
    let mut names: Vec<PathBuf> = std::fs::read_dir(parts)
        .map_err(|e| io_err(parts, "cannot read the segments", e))?
        .flatten()
        .map(|e| e.path())
        .filter(|p| {
            p.file_name()
                .and_then(|n| n.to_str())
                .is_some_and(|n| n.starts_with("segment-") && n.ends_with(".wav"))
        })
        .collect();
    names.sort();
    if names.is_empty() {
        std::fs::remove_dir_all(parts).map_err(|e| io_err(parts, "cannot remove", e))?;
        return Ok(0);
    }
    let first = hound::WavReader::open(&names[0])
        .map_err(|e| io_err(&names[0], "cannot read a segment", e))?;
    let spec = first.spec();
    drop(first);
    if spec != float_spec(spec.sample_rate) {
        return Err(io_err(
            &names[0],
            "unexpected segment format",
            "not 2-channel float32",
        ));
    }
    let mut frames = 0u64;
    crate::atomic::write_with(out, |file| {
        let map = |e: hound::Error| std::io::Error::other(e.to_string());
        let mut w = hound::WavWriter::new(BufWriter::new(file), spec).map_err(map)?;
        for p in &names {
            let mut r = hound::WavReader::open(p).map_err(map)?;
            if r.spec() != spec {
                return Err(std::io::Error::other(format!(
                    "{}: segment format differs from the first",
                    p.display()
                )));
            }
            for s in r.samples::<f32>() {
                w.write_sample(s.map_err(map)?).map_err(map)?;
                frames += 1;
            }
        }
        w.finalize().map_err(map)
    })
    .map_err(|e| io_err(out, "cannot join the run's segments", e))?;
    std::fs::remove_dir_all(parts).map_err(|e| io_err(parts, "cannot remove the segments", e))?;
    Ok(frames / 2)
}

/// Joins what unfinished runs in `dir` left (a crash or a kill while recording) into their
/// final files; returns those files. A run whose final file exists already only loses its
/// leftover segments (the join had finished).
pub fn recover(dir: &Path) -> Result<Vec<PathBuf>, CaptureError> {
    let Ok(list) = std::fs::read_dir(dir) else {
        return Ok(Vec::new());
    };
    let mut out = Vec::new();
    for e in list.flatten() {
        let p = e.path();
        let Some(name) = p.file_name().and_then(|n| n.to_str()) else {
            continue;
        };
        let Some(final_name) = name.strip_suffix(PARTS_SUFFIX) else {
            continue;
        };
        if !p.is_dir() {
            continue;
        }
        let target = dir.join(final_name);
        if target.exists() {
            std::fs::remove_dir_all(&p).map_err(|e| io_err(&p, "cannot remove", e))?;
            continue;
        }
        if join_parts(&p, &target)? > 0 {
            out.push(target);
        }
    }
    out.sort();
    Ok(out)
}

/// When a recording stops by itself.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct AutoStop {
    /// Stop once the speed, having been above this, falls below it (or the pulses stop), rpm.
    pub below_rpm: Option<f64>,
    /// Stop after this many seconds.
    pub after_s: Option<f64>,
}

impl AutoStop {
    /// True when `p` meets the condition.
    pub fn reached(&self, p: &RunProgress) -> bool {
        if self.after_s.is_some_and(|t| p.seconds >= t) {
            return true;
        }
        match self.below_rpm {
            Some(lim) => p.top_rpm > 1.1 * lim && p.speed_rpm.is_none_or(|s| s < lim),
            None => false,
        }
    }
}

/// Records from `source` until `stop` says so or the auto-stop condition is met, then finishes
/// the file. `on_progress` sees the progress a few times a second.
pub fn record(
    source: &mut dyn Source,
    recorder: RunRecorder,
    auto: AutoStop,
    stall: Duration,
    mut stop: impl FnMut() -> bool,
    mut on_progress: impl FnMut(&RunProgress),
) -> Result<PathBuf, CaptureError> {
    let mut rec = recorder;
    let mut buf = Vec::with_capacity(8192);
    let mut last_data = Instant::now();
    let mut last_report = Instant::now();
    loop {
        if stop() {
            break;
        }
        buf.clear();
        match source.read(&mut buf, Duration::from_millis(20)) {
            Ok(()) => {}
            Err(SourceError::Ended) => break,
            Err(e) => {
                // What is on disk stays: join it so the run is usable, then report the cause.
                let path = rec.finish()?;
                return Err(CaptureError::Save(format!(
                    "{e}; the run recorded so far is in {}",
                    path.display()
                )));
            }
        }
        if buf.is_empty() {
            if last_data.elapsed() > stall {
                let path = rec.finish()?;
                return Err(CaptureError::Source(SourceError::Lost(format!(
                    "no samples for {:.1} s: the device stopped delivering (unplugged?); the run \
                     recorded so far is in {}",
                    stall.as_secs_f64(),
                    path.display()
                ))));
            }
            continue;
        }
        last_data = Instant::now();
        rec.push(&buf)?;
        // The stop condition on the data (the speed is read four times a second of signal),
        // the person told a few times a second of wall time.
        let stop_now = auto.reached(&rec.progress());
        if stop_now || last_report.elapsed() >= Duration::from_millis(200) {
            last_report = Instant::now();
            let p = rec.take_progress();
            on_progress(&p);
        }
        if stop_now {
            break;
        }
    }
    rec.finish()
}

/// Fills `entry` for `file`, a finished run inside the session folder `session_dir`: its
/// relative path, rate, frames and size.
pub fn session_entry(
    session_dir: &Path,
    file: &Path,
    mut entry: SavedRun,
) -> Result<SavedRun, CaptureError> {
    let rel = file.strip_prefix(session_dir).map_err(|_| {
        CaptureError::Setup(format!(
            "{}: a run added to a session must lie inside its folder {}",
            file.display(),
            session_dir.display()
        ))
    })?;
    let info = crate::acquire::wav::probe(file).map_err(|e| CaptureError::Save(e.to_string()))?;
    entry.file = rel.to_string_lossy().replace('\\', "/");
    entry.sample_rate_hz = info.sample_rate_hz;
    entry.frames = info.frames;
    entry.bytes = std::fs::metadata(file)
        .map_err(|e| io_err(file, "cannot read", e))?
        .len();
    Ok(entry)
}

/// Adds a finished run (inside the session folder) to the session's manifest, under the
/// session's lock.
pub fn add_to_session(
    session_dir: &Path,
    file: &Path,
    entry: SavedRun,
) -> Result<(), CaptureError> {
    let _lock = crate::session::lock::SessionLock::acquire(
        session_dir,
        "adding a run",
        Duration::from_secs(5),
    )
    .map_err(|e| CaptureError::Save(e.to_string()))?;
    let mut s = Session::open(session_dir).map_err(|e| CaptureError::Save(e.to_string()))?;
    let entry = session_entry(session_dir, file, entry)?;
    s.manifest.runs.retain(|r| r.file != entry.file);
    s.manifest.runs.push(entry);
    s.save().map_err(|e| CaptureError::Save(e.to_string()))
}

/// A [`SavedRun`] for a run recorded here: channel 0 the tach, channel 1 the vibration; the
/// file's size and frames are filled by [`add_to_session`].
pub fn saved_run(pulses_per_rev: usize, note: &str) -> SavedRun {
    SavedRun {
        file: String::new(),
        recorded: crate::clock::utc_now(),
        sample_rate_hz: 1,
        frames: 0,
        bytes: 0,
        tach_channel: 0,
        channel: 1,
        pulses_per_rev: pulses_per_rev.max(1),
        sensitivity_mv_per_unit: None,
        full_scale_volts: 1.0,
        note: note.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn frames(n: usize, seed: u32) -> Vec<[f32; 2]> {
        (0..n)
            .map(|i| {
                let t = (i as u32).wrapping_mul(2_654_435_761).wrapping_add(seed);
                [
                    (t % 1000) as f32 / 1000.0 - 0.5,
                    ((t >> 10) % 1000) as f32 / 997.0 - 0.5,
                ]
            })
            .collect()
    }

    /// What was pushed is what the final file holds, bit for bit; segments are gone after.
    #[test]
    fn a_run_is_saved_bit_exact_and_segments_removed() {
        let dir = tempfile::tempdir().expect("temp");
        let out = dir.path().join("r.wav");
        let mut rec = RunRecorder::create(
            &out,
            8000,
            RunRecordOptions {
                segment_s: 0.5,
                pulses_per_rev: 1,
            },
        )
        .expect("create");
        let data = frames(8000 * 3 + 123, 7);
        for c in data.chunks(777) {
            rec.push(c).expect("push");
        }
        assert!(parts_dir(&out).join(segment_name(6)).is_file());
        let p = rec.finish().expect("finish");
        assert_eq!(p, out);
        assert!(!parts_dir(&out).exists());
        let mut r = hound::WavReader::open(&out).expect("wav");
        let s: Vec<f32> = r.samples::<f32>().map(|v| v.expect("sample")).collect();
        let flat: Vec<f32> = data.iter().flat_map(|f| [f[0], f[1]]).collect();
        assert!(s == flat);
        // Never overwrites.
        assert!(RunRecorder::create(&out, 8000, RunRecordOptions::default()).is_err());
    }

    /// A run killed mid-way (the recorder dropped without finishing) is joined by `recover`
    /// with every finished segment; nothing is lost but the unfinished one.
    #[test]
    fn an_unfinished_run_is_recovered() {
        let dir = tempfile::tempdir().expect("temp");
        let out = dir.path().join("killed.wav");
        let mut rec = RunRecorder::create(
            &out,
            1000,
            RunRecordOptions {
                segment_s: 1.0,
                pulses_per_rev: 1,
            },
        )
        .expect("create");
        let data = frames(3500, 3);
        rec.push(&data).expect("push");
        drop(rec);
        assert!(!out.exists());
        let got = recover(dir.path()).expect("recover");
        assert_eq!(got, vec![out.clone()]);
        let info = crate::acquire::wav::probe(&out).expect("probe");
        assert_eq!(info.frames, 3000, "three whole segments survive the kill");
        assert!(!parts_dir(&out).exists());
        assert!(recover(dir.path()).expect("again").is_empty());
    }

    #[test]
    fn auto_stop_waits_for_the_machine_to_come_down() {
        let mut p = RunProgress {
            seconds: 10.0,
            seconds_saved: 9.0,
            speed_rpm: Some(3000.0),
            top_rpm: 3000.0,
            peak_fs: [0.5, 0.1],
        };
        let a = AutoStop {
            below_rpm: Some(200.0),
            after_s: None,
        };
        assert!(!a.reached(&p));
        p.speed_rpm = Some(150.0);
        assert!(a.reached(&p));
        p.speed_rpm = None;
        assert!(a.reached(&p));
        // A run-up that has not started yet does not stop.
        p.top_rpm = 0.0;
        assert!(!a.reached(&p));
        let t = AutoStop {
            below_rpm: None,
            after_s: Some(5.0),
        };
        assert!(t.reached(&p));
    }

    /// The synthetic coast-down recorded through [`record`] with an auto-stop: the file ends
    /// soon after the rotor stops, and the tracked critical speed is the generator's
    /// (quasi-steady unbalance response: the 1× acceleration r⁴/|1 − r² + 2iζr| peaks within
    /// 0.2 % of ω_n for ζ = 0.04 — rotating-unbalance response, Den Hartog, Mechanical
    /// Vibrations, from memory; asserted to 1 %).
    #[test]
    fn the_synthetic_coast_down_records_and_tracks() {
        use crate::capture::generator::RunGenerator;
        let dir = tempfile::tempdir().expect("temp");
        let out = dir.path().join("gen.wav");
        let mut src = RunGenerator::new(8000, 2048, false);
        let rec = RunRecorder::create(&out, 8000, RunRecordOptions::default()).expect("create");
        let mut seen = 0.0f64;
        let path = record(
            &mut src,
            rec,
            AutoStop {
                below_rpm: Some(120.0),
                after_s: None,
            },
            Duration::from_secs(5),
            || false,
            |p| seen = seen.max(p.top_rpm),
        )
        .expect("records");
        assert!(
            (seen - RunGenerator::TOP_RPM).abs() < 60.0,
            "speed read live: {seen}"
        );
        let secs = crate::acquire::wav::probe(&path).expect("probe").frames as f64 / 8000.0;
        // It stops once the speed read from the last revolutions (a little behind the true
        // one) falls below 120 rpm: within a few seconds after the true speed does.
        let below = (0..10_000)
            .map(|k| k as f64 * 0.01)
            .find(|&t| RunGenerator::speed_rpm(t) < 120.0)
            .expect("the generator slows down");
        assert!(
            secs > below - 0.5 && secs < below + 4.0,
            "{secs} s against the speed falling below 120 rpm at {below} s"
        );
        let r =
            crate::coast::analyse_run(&path, &crate::coast::RunOptions::default()).expect("tracks");
        assert_eq!(r.direction, crate::coast::Direction::CoastDown);
        let c: Vec<f64> = r
            .critical_speeds
            .iter()
            .filter(|c| c.order == 1)
            .map(|c| c.speed_rpm)
            .collect();
        assert_eq!(c.len(), 1, "{c:?}");
        assert!(
            (c[0] / RunGenerator::CRITICAL_RPM - 1.0).abs() < 0.01,
            "{c:?}"
        );
    }
}

//! Live input from an audio interface through cpal — the only module that knows cpal.
//!
//! The audio callback converts the two chosen channels to f32 full-scale units and pushes them,
//! interleaved, into a lock-free single-producer ring buffer (rtrb). It never locks, allocates or
//! logs; frames it could not push are counted (overruns), and stream errors are counted and
//! flagged in atomics for the capture worker to report.

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::time::Duration;

use cpal::traits::{DeviceTrait, HostTrait, StreamTrait};
use cpal::{Sample, SampleFormat, SizedSample};

use super::source::{Health, Source, SourceError};

/// An input device as listed for the person.
#[derive(Debug, Clone, PartialEq)]
pub struct DeviceInfo {
    /// The id `--device` takes (`host:device`), stable across runs unlike an index.
    pub id: String,
    /// Human-readable name.
    pub name: String,
    /// Default configuration, e.g. "2 ch, 48000 Hz, f32".
    pub default_config: Option<String>,
    /// Supported ranges, e.g. "2 ch, 8000–192000 Hz, i16".
    pub formats: Vec<String>,
}

/// Lists the input devices of the default host. Slow and noisy on ALSA: call it off the UI thread.
pub fn list_inputs() -> Result<Vec<DeviceInfo>, SourceError> {
    let host = cpal::default_host();
    let devices = host
        .input_devices()
        .map_err(|e| SourceError::Device(format!("cannot list input devices: {e}")))?;
    let mut out = Vec::new();
    for d in devices {
        let Ok(id) = d.id() else { continue };
        let name = d
            .description()
            .map(|x| x.name().to_string())
            .unwrap_or_else(|_| id.to_string());
        let default_config = d.default_input_config().ok().map(|c| {
            format!(
                "{} ch, {} Hz, {}",
                c.channels(),
                c.sample_rate(),
                c.sample_format()
            )
        });
        let formats = d
            .supported_input_configs()
            .map(|it| {
                it.map(|r| {
                    format!(
                        "{} ch, {}–{} Hz, {}",
                        r.channels(),
                        r.min_sample_rate(),
                        r.max_sample_rate(),
                        r.sample_format()
                    )
                })
                .collect()
            })
            .unwrap_or_default();
        out.push(DeviceInfo {
            id: id.to_string(),
            name,
            default_config,
            formats,
        });
    }
    Ok(out)
}

/// What the callback and the error callback report, lock-free.
#[derive(Debug, Default)]
pub struct Counters {
    /// Frames delivered by the device.
    pub frames: AtomicU64,
    /// Frames dropped because the ring buffer was full.
    pub overrun_frames: AtomicU64,
    /// Stream errors and xruns reported by the host.
    pub stream_errors: AtomicU64,
    /// The device went away (unplugged) or the stream died.
    pub lost: AtomicBool,
}

/// An open input stream feeding a ring buffer. Keep it on the thread that opened it.
pub struct LiveInput {
    stream: Option<cpal::Stream>,
    consumer: rtrb::Consumer<f32>,
    counters: Arc<Counters>,
    rate: u32,
    /// Device id.
    pub id: String,
    /// Sample format the device delivers.
    pub format: SampleFormat,
}

/// How to open a device.
#[derive(Debug, Clone, PartialEq)]
pub struct OpenOptions {
    /// Device id (`alsa:hw:1,0`, `alsa:default`…).
    pub id: String,
    /// Channel indices for A and B.
    pub channels: [usize; 2],
    /// Sample rate, Hz (`None`: the device's default).
    pub sample_rate_hz: Option<u32>,
    /// Frames per callback (`None`: the host's default).
    pub buffer_frames: Option<u32>,
}

fn push_frames<T: Sample + SizedSample>(
    data: &[T],
    nch: usize,
    [ca, cb]: [usize; 2],
    producer: &mut rtrb::Producer<f32>,
    counters: &Counters,
) where
    f32: cpal::FromSample<T>,
{
    let frames = data.len() / nch;
    let mut dropped = 0u64;
    for frame in data.chunks_exact(nch) {
        if producer.slots() >= 2 {
            // Pushing into a ring with free slots cannot fail.
            let _ = producer.push(frame[ca].to_sample::<f32>());
            let _ = producer.push(frame[cb].to_sample::<f32>());
        } else {
            dropped += 1;
        }
    }
    counters.frames.fetch_add(frames as u64, Ordering::Relaxed);
    if dropped > 0 {
        counters
            .overrun_frames
            .fetch_add(dropped, Ordering::Relaxed);
    }
}

fn describe(e: &cpal::Error, id: &str) -> String {
    use cpal::ErrorKind as K;
    match e.kind() {
        K::DeviceBusy => format!("device {id} is busy: another program is using it ({e})"),
        K::DeviceNotAvailable => format!("device {id} is not available (unplugged?): {e}"),
        K::UnsupportedConfig => {
            format!("device {id} does not support the requested rate, channels or buffer size: {e}")
        }
        K::PermissionDenied => format!("no permission to open device {id}: {e}"),
        _ => format!("device {id}: {e}"),
    }
}

impl LiveInput {
    /// Opens and starts the device. The ring buffer holds two seconds.
    pub fn open(o: &OpenOptions) -> Result<Self, SourceError> {
        let host = cpal::default_host();
        let parsed: cpal::DeviceId = o.id.parse().map_err(|e| {
            SourceError::Device(format!(
                "cannot read device id {:?} ({e}); `tapgrid devices` lists the ids",
                o.id
            ))
        })?;
        let device = host.device_by_id(&parsed).ok_or_else(|| {
            SourceError::Device(format!(
                "no input device {:?}; `tapgrid devices` lists the ids",
                o.id
            ))
        })?;
        let def = device
            .default_input_config()
            .map_err(|e| SourceError::Device(describe(&e, &o.id)))?;
        let nch = def.channels() as usize;
        let need = o.channels[0].max(o.channels[1]) + 1;
        if nch < need {
            return Err(SourceError::Device(format!(
                "device {} has {nch} input channels; channel {} was asked for",
                o.id,
                need - 1
            )));
        }
        let format = def.sample_format();
        let mut config: cpal::StreamConfig = def.config();
        if let Some(r) = o.sample_rate_hz {
            config.sample_rate = r;
        }
        if let Some(b) = o.buffer_frames {
            config.buffer_size = cpal::BufferSize::Fixed(b);
        }
        let rate = config.sample_rate;
        let (producer, consumer) = rtrb::RingBuffer::<f32>::new(4 * rate as usize);
        let counters = Arc::new(Counters::default());
        let chans = o.channels;
        let err_counters = counters.clone();
        let on_error = move |e: cpal::Error| {
            err_counters.stream_errors.fetch_add(1, Ordering::Relaxed);
            if matches!(
                e.kind(),
                cpal::ErrorKind::DeviceNotAvailable | cpal::ErrorKind::StreamInvalidated
            ) {
                err_counters.lost.store(true, Ordering::Relaxed);
            }
        };
        macro_rules! build {
            ($t:ty) => {{
                let mut producer = producer;
                let c = counters.clone();
                device.build_input_stream::<$t, _, _>(
                    config,
                    move |data: &[$t], _: &cpal::InputCallbackInfo| {
                        push_frames(data, nch, chans, &mut producer, &c)
                    },
                    on_error,
                    None,
                )
            }};
        }
        let stream = match format {
            SampleFormat::I8 => build!(i8),
            SampleFormat::I16 => build!(i16),
            SampleFormat::I32 => build!(i32),
            SampleFormat::I64 => build!(i64),
            SampleFormat::U8 => build!(u8),
            SampleFormat::U16 => build!(u16),
            SampleFormat::U32 => build!(u32),
            SampleFormat::F32 => build!(f32),
            SampleFormat::F64 => build!(f64),
            other => {
                return Err(SourceError::Device(format!(
                    "device {} delivers {other} samples, which tapgrid does not read",
                    o.id
                )));
            }
        }
        .map_err(|e| SourceError::Device(describe(&e, &o.id)))?;
        stream
            .play()
            .map_err(|e| SourceError::Device(describe(&e, &o.id)))?;
        Ok(Self {
            stream: Some(stream),
            consumer,
            counters,
            rate,
            id: o.id.clone(),
            format,
        })
    }
}

impl Drop for LiveInput {
    fn drop(&mut self) {
        // Closing a stream joins its audio thread, which may sit forever in a read from a device
        // that vanished. Close it on a thread of its own so the caller is never held up by that.
        if let Some(stream) = self.stream.take() {
            let _ = std::thread::Builder::new()
                .name("tapgrid-close-input".into())
                .spawn(move || drop(stream));
        }
    }
}

impl Source for LiveInput {
    fn sample_rate_hz(&self) -> u32 {
        self.rate
    }

    fn read(&mut self, out: &mut Vec<[f32; 2]>, wait: Duration) -> Result<(), SourceError> {
        let deadline = std::time::Instant::now() + wait;
        loop {
            let n = self.consumer.slots() / 2 * 2;
            if n > 0 {
                if let Ok(chunk) = self.consumer.read_chunk(n) {
                    let (s1, s2) = chunk.as_slices();
                    let mut it = s1.iter().chain(s2.iter());
                    while let (Some(&a), Some(&b)) = (it.next(), it.next()) {
                        out.push([a, b]);
                    }
                    chunk.commit_all();
                }
                return Ok(());
            }
            if self.counters.lost.load(Ordering::Relaxed) {
                return Err(SourceError::Lost(format!(
                    "device {} stopped delivering samples (unplugged or failed)",
                    self.id
                )));
            }
            if std::time::Instant::now() >= deadline {
                return Ok(());
            }
            std::thread::sleep(Duration::from_millis(2));
        }
    }

    fn health(&self) -> Health {
        Health {
            overrun_frames: self.counters.overrun_frames.load(Ordering::Relaxed),
            stream_errors: self.counters.stream_errors.load(Ordering::Relaxed),
        }
    }
}

/// A short sound telling a person at the part what became of a hit, so they need not look at
/// the screen between taps.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cue {
    /// The hit was kept: two short rising tones.
    Kept,
    /// The hit was rejected: one low, longer tone.
    Rejected,
    /// The station is done: three rising tones.
    StationDone,
}

impl Cue {
    /// Tones (frequency Hz, duration s) played one after the other.
    pub fn tones(self) -> &'static [(f64, f64)] {
        match self {
            Cue::Kept => &[(880.0, 0.07), (1320.0, 0.07)],
            Cue::Rejected => &[(330.0, 0.28)],
            Cue::StationDone => &[(660.0, 0.08), (880.0, 0.08), (1320.0, 0.12)],
        }
    }

    /// The cue as mono samples at `rate` Hz, each tone faded in and out over 5 ms so it does not
    /// click.
    pub fn samples(self, rate: u32) -> Vec<f32> {
        let rate = f64::from(rate.max(1));
        let mut out = Vec::new();
        for &(f, d) in self.tones() {
            let n = (d * rate).round() as usize;
            let ramp = (0.005 * rate).max(1.0);
            for k in 0..n {
                let t = k as f64 / rate;
                let edge = (k as f64 / ramp).min((n - k) as f64 / ramp).min(1.0);
                out.push((0.3 * edge * (2.0 * std::f64::consts::PI * f * t).sin()) as f32);
            }
        }
        out
    }
}

/// Plays `cue` on the default output device, on a thread of its own so capture is never held up;
/// the handle says whether it could be played.
pub fn play_cue(cue: Cue) -> std::thread::JoinHandle<Result<(), SourceError>> {
    std::thread::spawn(move || {
        let host = cpal::default_host();
        let device = host
            .default_output_device()
            .ok_or_else(|| SourceError::Device("no output device for sound cues".into()))?;
        let def = device
            .default_output_config()
            .map_err(|e| SourceError::Device(describe(&e, "default output")))?;
        let nch = usize::from(def.channels()).max(1);
        let config: cpal::StreamConfig = def.config();
        let samples = cue.samples(config.sample_rate);
        let seconds = samples.len() as f64 / f64::from(config.sample_rate.max(1));
        macro_rules! build {
            ($t:ty) => {{
                let mut pos = 0usize;
                let samples = samples.clone();
                device.build_output_stream::<$t, _, _>(
                    config,
                    move |data: &mut [$t], _: &cpal::OutputCallbackInfo| {
                        for frame in data.chunks_exact_mut(nch) {
                            let v = samples.get(pos).copied().unwrap_or(0.0);
                            pos += 1;
                            for s in frame {
                                *s = <$t as Sample>::from_sample(v);
                            }
                        }
                    },
                    |_| {},
                    None,
                )
            }};
        }
        let stream = match def.sample_format() {
            SampleFormat::I16 => build!(i16),
            SampleFormat::I32 => build!(i32),
            SampleFormat::U16 => build!(u16),
            SampleFormat::F32 => build!(f32),
            SampleFormat::F64 => build!(f64),
            other => {
                return Err(SourceError::Device(format!(
                    "the output device takes {other} samples, which sound cues do not write"
                )));
            }
        }
        .map_err(|e| SourceError::Device(describe(&e, "default output")))?;
        stream
            .play()
            .map_err(|e| SourceError::Device(describe(&e, "default output")))?;
        std::thread::sleep(Duration::from_secs_f64(seconds + 0.1));
        drop(stream);
        Ok(())
    })
}

#[cfg(test)]
mod cue_tests {
    use super::Cue;

    #[test]
    fn cues_have_the_stated_length_and_stay_below_full_scale() {
        // Length = sum of tone durations × rate; peak 0.3 of full scale (our own choice).
        let s = Cue::Kept.samples(48_000);
        assert_eq!(s.len(), 2 * 3360);
        assert!(s.iter().all(|v| v.abs() <= 0.3 + 1e-6));
        assert_eq!(Cue::Rejected.samples(44_100).len(), 12_348);
        // Faded in: the first sample is silent, no click.
        assert_eq!(s[0], 0.0);
    }
}

//! WAV decoding and encoding (16/24/32-bit integer PCM and 32-bit float; plain or extensible).

use std::fs::File;
use std::io::BufReader;
use std::path::Path;

use serde::{Deserialize, Serialize};

use super::InputError;

/// Sample encoding of a WAV file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SampleEncoding {
    /// 16-bit signed integer PCM.
    Int16,
    /// 24-bit signed integer PCM.
    Int24,
    /// 32-bit signed integer PCM.
    Int32,
    /// 32-bit IEEE float.
    Float32,
}

impl SampleEncoding {
    /// Bytes of one sample in a WAV file's data.
    pub fn bytes_per_sample(self) -> usize {
        match self {
            SampleEncoding::Int16 => 2,
            SampleEncoding::Int24 => 3,
            SampleEncoding::Int32 | SampleEncoding::Float32 => 4,
        }
    }

    fn spec(self) -> (u16, hound::SampleFormat) {
        match self {
            SampleEncoding::Int16 => (16, hound::SampleFormat::Int),
            SampleEncoding::Int24 => (24, hound::SampleFormat::Int),
            SampleEncoding::Int32 => (32, hound::SampleFormat::Int),
            SampleEncoding::Float32 => (32, hound::SampleFormat::Float),
        }
    }
}

/// Header facts of a WAV file.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct WavInfo {
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Number of interleaved channels.
    pub channels: usize,
    /// Encoding.
    pub encoding: SampleEncoding,
    /// Frames (samples per channel).
    pub frames: usize,
}

/// Two channels taken out of a recording, in digital full-scale units.
#[derive(Debug, Clone, PartialEq)]
pub struct TwoChannels {
    /// Header facts.
    pub info: WavInfo,
    /// Channel A samples.
    pub a: Vec<f64>,
    /// Channel B samples.
    pub b: Vec<f64>,
}

fn open(path: &Path) -> Result<hound::WavReader<BufReader<File>>, InputError> {
    hound::WavReader::open(path).map_err(|e| InputError::new(path, describe(e)))
}

fn describe(e: hound::Error) -> String {
    match e {
        hound::Error::FormatError(m) => format!("not a readable WAV file ({m})"),
        hound::Error::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => {
            "the WAV file is truncated: its data ends before its header says".to_string()
        }
        hound::Error::IoError(io) if io.to_string().contains("Failed to read enough bytes") => {
            "not a readable WAV file (shorter than a WAV header; empty?)".to_string()
        }
        hound::Error::IoError(io) => format!("cannot read: {io}"),
        hound::Error::Unsupported => "unsupported WAV encoding".to_string(),
        hound::Error::TooWide => "sample width too large".to_string(),
        other => other.to_string(),
    }
}

/// Reads the header and checks the encoding is one tapgrid accepts.
pub fn probe(path: &Path) -> Result<WavInfo, InputError> {
    let r = open(path)?;
    info_of(path, &r)
}

fn info_of<R: std::io::Read>(path: &Path, r: &hound::WavReader<R>) -> Result<WavInfo, InputError> {
    let spec = r.spec();
    let encoding = match (spec.sample_format, spec.bits_per_sample) {
        (hound::SampleFormat::Int, 16) => SampleEncoding::Int16,
        (hound::SampleFormat::Int, 24) => SampleEncoding::Int24,
        (hound::SampleFormat::Int, 32) => SampleEncoding::Int32,
        (hound::SampleFormat::Float, 32) => SampleEncoding::Float32,
        (hound::SampleFormat::Int, 8) => {
            return Err(InputError::new(
                path,
                "8-bit PCM is not accepted (too coarse for modal testing); record at 16, 24 or 32 bits",
            ));
        }
        (f, b) => {
            return Err(InputError::new(
                path,
                format!("unsupported sample format: {b}-bit {f:?}"),
            ));
        }
    };
    if spec.channels < 2 {
        return Err(InputError::new(
            path,
            format!(
                "has {} channel; a test needs two (excitation/reference and response)",
                spec.channels
            ),
        ));
    }
    if spec.sample_rate == 0 {
        return Err(InputError::new(path, "sample rate is zero"));
    }
    Ok(WavInfo {
        sample_rate_hz: spec.sample_rate,
        channels: spec.channels as usize,
        encoding,
        frames: r.duration() as usize,
    })
}

/// Takes two channels (`a`, `b`, of `channels` interleaved samples of `W` bytes per frame) out
/// of sample data; only the first when `b` is `None` (`cb` is then left empty). Samples are taken
/// as fixed-size arrays and each channel is written in one pass, so there is no per-sample bounds
/// check or capacity test: the decode runs at memory speed.
#[allow(clippy::too_many_arguments)]
fn deinterleave<const W: usize>(
    data: &[u8],
    channels: usize,
    a: usize,
    b: Option<usize>,
    ca: &mut Vec<f64>,
    cb: &mut Vec<f64>,
    scale: f64,
    get: impl Fn([u8; W]) -> f64,
) {
    let (samples, _) = data.as_chunks::<W>();
    let one = |out: &mut Vec<f64>, ch: usize| {
        out.clear();
        match channels {
            2 => channel_of::<W, 2>(samples, ch, out, scale, &get),
            4 => channel_of::<W, 4>(samples, ch, out, scale, &get),
            _ => out.extend(samples.chunks_exact(channels).map(|f| get(f[ch]) * scale)),
        }
    };
    one(ca, a);
    match b {
        Some(b) => one(cb, b),
        None => cb.clear(),
    }
}

/// Channel `ch` of frames of `C` samples: a fixed frame size makes the copy a plain strided loop.
fn channel_of<const W: usize, const C: usize>(
    samples: &[[u8; W]],
    ch: usize,
    out: &mut Vec<f64>,
    scale: f64,
    get: &impl Fn([u8; W]) -> f64,
) {
    let (frames, _) = samples.as_chunks::<C>();
    // The channel was checked against the file's count; the bound lets the compiler drop the
    // check per frame.
    debug_assert!(ch < C);
    let ch = ch.min(C - 1);
    out.extend(frames.iter().map(|f| get(f[ch]) * scale));
}

/// Offset and length of the `data` chunk of a RIFF/WAVE file.
fn data_chunk(bytes: &[u8]) -> Option<(usize, usize)> {
    if bytes.len() < 12 || &bytes[0..4] != b"RIFF" || &bytes[8..12] != b"WAVE" {
        return None;
    }
    let mut pos = 12usize;
    while pos + 8 <= bytes.len() {
        let id = &bytes[pos..pos + 4];
        let size = u32::from_le_bytes(bytes[pos + 4..pos + 8].try_into().ok()?) as usize;
        if id == b"data" {
            return Some((pos + 8, size));
        }
        pos = pos.checked_add(8 + size + (size & 1))?;
    }
    None
}

/// Decodes channels `a` and `b` (0-based) of a WAV file to full-scale units.
///
/// hound validates the header; the sample data is then decoded in one pass straight from the
/// file's bytes, which is several times faster than a per-sample iterator on long recordings.
pub fn read_two_channels(path: &Path, a: usize, b: usize) -> Result<TwoChannels, InputError> {
    let mut d = Decoder::default();
    let info = d.decode_with(path, a, b, NonFinite::Refuse)?;
    Ok(TwoChannels {
        info,
        a: d.a,
        b: d.b,
    })
}

/// A WAV decoder that keeps its buffers between files: on a test of many long recordings, fresh
/// multi-megabyte buffers per file cost more in page faults than the decoding itself.
#[derive(Debug, Default)]
pub struct Decoder {
    bytes: Vec<u8>,
    /// Channel A of the last file decoded, full-scale units.
    pub a: Vec<f64>,
    /// Channel B of the last file decoded.
    pub b: Vec<f64>,
}

/// What to do with NaN or ±∞ samples in a float recording.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NonFinite {
    /// An error naming the file, channel and frame.
    Refuse,
    /// Passed on as they are: the signal chain rejects the hits whose records hold them.
    Keep,
}

impl Decoder {
    /// Decodes channels `a` and `b` of `path` into `self.a` and `self.b`; a float recording with
    /// a NaN or ±∞ sample is an error.
    pub fn decode(&mut self, path: &Path, a: usize, b: usize) -> Result<WavInfo, InputError> {
        self.decode_with(path, a, b, NonFinite::Refuse)
    }

    /// [`Decoder::decode`] with a choice of what non-finite samples do.
    pub fn decode_with(
        &mut self,
        path: &Path,
        a: usize,
        b: usize,
        non_finite: NonFinite,
    ) -> Result<WavInfo, InputError> {
        self.decode_channels(path, a, b, true, non_finite)
    }

    /// Decodes channel `a` only into `self.a` (`self.b` is left empty): what a scan for taps
    /// needs, at half the cost. `b` is still checked against the file's channel count.
    pub fn decode_first(
        &mut self,
        path: &Path,
        a: usize,
        b: usize,
        non_finite: NonFinite,
    ) -> Result<WavInfo, InputError> {
        self.decode_channels(path, a, b, false, non_finite)
    }

    /// Decodes channels `a` and `b` of a WAV file already in memory (`label` names it in
    /// errors) into `self.a` and `self.b`.
    pub fn decode_slice(
        &mut self,
        label: &Path,
        bytes: &[u8],
        a: usize,
        b: usize,
        non_finite: NonFinite,
    ) -> Result<WavInfo, InputError> {
        decode_bytes(
            label,
            bytes,
            [a, b],
            true,
            &mut self.a,
            &mut self.b,
            non_finite,
        )
    }

    /// Both channel indices are checked; channel `b` is decoded only when `want_b`.
    fn decode_channels(
        &mut self,
        path: &Path,
        a: usize,
        b: usize,
        want_b: bool,
        non_finite: NonFinite,
    ) -> Result<WavInfo, InputError> {
        use std::io::Read;
        self.bytes.clear();
        std::fs::File::open(path)
            .and_then(|mut f| f.read_to_end(&mut self.bytes))
            .map_err(|e| InputError::new(path, format!("cannot read: {e}")))?;
        decode_bytes(
            path,
            &self.bytes,
            [a, b],
            want_b,
            &mut self.a,
            &mut self.b,
            non_finite,
        )
    }
}

fn decode_bytes(
    path: &Path,
    bytes: &[u8],
    [a, b]: [usize; 2],
    want_b: bool,
    ca: &mut Vec<f64>,
    cb: &mut Vec<f64>,
    non_finite: NonFinite,
) -> Result<WavInfo, InputError> {
    {
        let r = hound::WavReader::new(std::io::Cursor::new(bytes))
            .map_err(|e| InputError::new(path, describe(e)))?;
        let info = info_of(path, &r)?;
        for (name, idx) in [("A", a), ("B", b)] {
            if idx >= info.channels {
                return Err(InputError::new(
                    path,
                    format!(
                        "channel {name} index {idx} is out of range: the file has {} channels (0..{})",
                        info.channels,
                        info.channels - 1
                    ),
                ));
            }
        }
        let (off, len) = data_chunk(bytes)
            .ok_or_else(|| InputError::new(path, "not a readable WAV file (no data chunk)"))?;
        if off + len > bytes.len() {
            return Err(InputError::new(
                path,
                format!(
                    "the WAV file is truncated: its data ends {} bytes before its header says",
                    off + len - bytes.len()
                ),
            ));
        }
        let width = info.encoding.bytes_per_sample();
        let stride = width * info.channels;
        if !len.is_multiple_of(stride) {
            return Err(InputError::new(
                path,
                "the WAV file is truncated: its last frame is incomplete",
            ));
        }
        let data = &bytes[off..off + len];
        let frames = len / stride;
        let ch = info.channels;
        let bb = want_b.then_some(b);
        match info.encoding {
            SampleEncoding::Int16 => {
                deinterleave(data, ch, a, bb, ca, cb, 1.0 / 32768.0, |x: [u8; 2]| {
                    i16::from_le_bytes(x) as f64
                })
            }
            SampleEncoding::Int24 => {
                deinterleave(data, ch, a, bb, ca, cb, 1.0 / 8_388_608.0, |x: [u8; 3]| {
                    (i32::from_le_bytes([0, x[0], x[1], x[2]]) >> 8) as f64
                })
            }
            SampleEncoding::Int32 => deinterleave(
                data,
                ch,
                a,
                bb,
                ca,
                cb,
                1.0 / 2_147_483_648.0,
                |x: [u8; 4]| i32::from_le_bytes(x) as f64,
            ),
            SampleEncoding::Float32 => deinterleave(data, ch, a, bb, ca, cb, 1.0, |x: [u8; 4]| {
                f32::from_le_bytes(x) as f64
            }),
        }
        if info.encoding == SampleEncoding::Float32 && non_finite == NonFinite::Refuse {
            for (name, ch) in [("A", &*ca), ("B", &*cb)] {
                if let Some(i) = ch.iter().position(|v| !v.is_finite()) {
                    return Err(InputError::new(
                        path,
                        format!(
                            "channel {name} holds a non-finite sample (NaN or infinity) at frame {i}"
                        ),
                    ));
                }
            }
        }
        Ok(WavInfo { frames, ..info })
    }
}

/// Encodes channels (full-scale units, clipped to ±1) into a WAV file, atomically.
///
/// # Panics
/// If `channels` is empty or the channels differ in length (a bug in the caller).
pub fn write_channels(
    path: &Path,
    sample_rate_hz: u32,
    encoding: SampleEncoding,
    channels: &[&[f64]],
) -> Result<(), InputError> {
    assert!(!channels.is_empty(), "write_channels needs a channel");
    let n = channels[0].len();
    assert!(
        channels.iter().all(|c| c.len() == n),
        "channel lengths differ"
    );
    let (bits, fmt) = encoding.spec();
    let spec = hound::WavSpec {
        channels: channels.len() as u16,
        sample_rate: sample_rate_hz,
        bits_per_sample: bits,
        sample_format: fmt,
    };
    crate::atomic::write_with(path, |file| {
        let mut w = hound::WavWriter::new(std::io::BufWriter::new(file), spec)
            .map_err(|e| std::io::Error::other(e.to_string()))?;
        let map = |e: hound::Error| std::io::Error::other(e.to_string());
        for i in 0..n {
            for c in channels {
                let v = c[i].clamp(-1.0, 1.0);
                match encoding {
                    SampleEncoding::Int16 => w
                        .write_sample((v * 32768.0).round().clamp(-32768.0, 32767.0) as i16)
                        .map_err(map)?,
                    SampleEncoding::Int24 => w
                        .write_sample(
                            (v * 8_388_608.0).round().clamp(-8_388_608.0, 8_388_607.0) as i32
                        )
                        .map_err(map)?,
                    SampleEncoding::Int32 => w
                        .write_sample(
                            (v * 2_147_483_648.0)
                                .round()
                                .clamp(-2_147_483_648.0, 2_147_483_647.0)
                                as i32,
                        )
                        .map_err(map)?,
                    SampleEncoding::Float32 => w.write_sample(v as f32).map_err(map)?,
                }
            }
        }
        w.finalize().map_err(map)
    })
    .map_err(|e| InputError::new(path, format!("cannot write: {e}")))
}

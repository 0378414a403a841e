//! The saved test: a folder with `session.json` (the manifest), `raw/` recordings that are never
//! modified after capture or import, and derived results. Every write is atomic.

pub mod lock;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use crate::acquire::InputError;
use crate::acquire::wav::{SampleEncoding, probe};
use crate::acquire::wavset::{PositionSource, WavSet};
use crate::analysis::{Analysis, Dataset, StationSource};
use crate::model::study::Study;
use crate::setup::Setup;
use crate::signal::Reason;

/// Manifest file name inside a session folder.
pub const MANIFEST: &str = "session.json";
/// The `format` value of a manifest.
pub const FORMAT: &str = "tapgrid-session";
/// Schema this build writes and reads (2 added the shaft model; 1 is migrated on open).
pub const SCHEMA_VERSION: u32 = 2;

/// The part under test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(default)]
pub struct Part {
    /// Name or tag of the part.
    pub name: String,
    /// Free notes (suspension, tip, hammer mass…).
    pub notes: String,
}

/// A measurement station.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Station {
    /// Station number.
    pub station: u32,
    /// Position along the part, m.
    pub position_m: f64,
    /// Where the position came from.
    pub position_source: PositionSource,
    /// Optional label.
    #[serde(default)]
    pub label: Option<String>,
}

/// A raw recording held by the session.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Recording {
    /// Station it belongs to.
    pub station: u32,
    /// Path relative to the session folder.
    pub file: String,
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Channels in the file.
    pub channels: usize,
    /// Encoding.
    pub encoding: SampleEncoding,
    /// Frames.
    pub frames: usize,
    /// File size in bytes, checked on open.
    pub bytes: u64,
}

/// A hit as saved: its automatic verdict and a person's override.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SavedHit {
    /// Station.
    pub station: u32,
    /// 0-based order in the station's recording.
    pub index: usize,
    /// Trigger time in the recording, s.
    pub time_s: f64,
    /// Final verdict.
    pub accepted: bool,
    /// Automatic reasons.
    pub reasons: Vec<Reason>,
    /// A person's decision (`true` accept, `false` reject), `None` = automatic.
    #[serde(rename = "override")]
    pub override_accept: Option<bool>,
}

/// A run-up or coast-down recorded with the session (tach and vibration), kept as recorded.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SavedRun {
    /// Path relative to the session folder (`runs/…`).
    pub file: String,
    /// When it was recorded, UTC.
    pub recorded: String,
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Frames.
    pub frames: usize,
    /// File size in bytes, checked on open.
    pub bytes: u64,
    /// Channel of the tach in the file.
    pub tach_channel: usize,
    /// Channel of the vibration sensor in the file.
    pub channel: usize,
    /// Tach pulses per revolution.
    pub pulses_per_rev: usize,
    /// Vibration sensor sensitivity, mV per m/s² (`None`: full-scale units).
    #[serde(default)]
    pub sensitivity_mv_per_unit: Option<f64>,
    /// Volts at digital full scale.
    pub full_scale_volts: f64,
    /// Free note (machine, sensor place, direction).
    #[serde(default)]
    pub note: String,
}

/// An instrument of the test as the report lists it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(default)]
pub struct Instrument {
    /// What it is for: hammer, tip, reference accelerometer, conditioner, interface…
    pub role: String,
    /// Make and model as on its label.
    pub model: String,
    /// Serial number.
    pub serial: String,
    /// Date of its last calibration.
    pub calibrated: String,
    /// Sensitivity as calibrated, with its unit.
    pub sensitivity: String,
}

/// Who tested, where, with what — entered once and kept with the session, for the report and
/// its sign-off.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(default)]
pub struct ReportInfo {
    /// Who did the test.
    pub operator: String,
    /// Who reviews it.
    pub reviewer: String,
    /// Where.
    pub site: String,
    /// When (free text; empty: the report's date).
    pub test_date: String,
    /// Signal conditioning (IEPE supply, gains, filters).
    pub conditioning: String,
    /// How the part was held (cords, foam, in its bearings).
    pub support: String,
    /// The instruments.
    pub instruments: Vec<Instrument>,
}

impl ReportInfo {
    /// Nothing entered.
    pub fn is_empty(&self) -> bool {
        *self == Self::default()
    }
}

/// The manifest.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Manifest {
    /// Always [`FORMAT`].
    pub format: String,
    /// Schema version.
    pub schema_version: u32,
    /// Program that wrote it.
    pub created_by: String,
    /// Part.
    pub part: Part,
    /// Setup used for analysis.
    pub setup: Setup,
    /// Stations.
    pub stations: Vec<Station>,
    /// Raw recordings.
    pub recordings: Vec<Recording>,
    /// Hits with verdicts and overrides.
    pub hits: Vec<SavedHit>,
    /// The shaft model and its service questions, when one was given.
    #[serde(default)]
    pub model: Option<Study>,
    /// The modal stage's settings as a person left them: method, band, and which modes (a pole
    /// choice is kept as the frequencies of the chosen poles). Absent: automatic.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fit: Option<crate::modal::ModalSettings>,
    /// Runs (coast-downs, run-ups) recorded with the session.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub runs: Vec<SavedRun>,
    /// Who tested, where and with what, for the report.
    #[serde(default, skip_serializing_if = "ReportInfo::is_empty")]
    pub report: ReportInfo,
}

impl Manifest {
    /// A manifest written by this build, with no hits yet.
    pub fn new(
        part: Part,
        setup: Setup,
        stations: Vec<Station>,
        recordings: Vec<Recording>,
    ) -> Self {
        Self {
            format: FORMAT.into(),
            schema_version: SCHEMA_VERSION,
            created_by: format!("tapgrid {}", env!("CARGO_PKG_VERSION")),
            part,
            setup,
            stations,
            recordings,
            hits: Vec::new(),
            model: None,
            fit: None,
            runs: Vec::new(),
            report: ReportInfo::default(),
        }
    }
}

impl Manifest {
    /// Reads a manifest's text (`path` names it in errors): JSON, format and schema (older ones
    /// migrated), then every value checked by [`Manifest::check`].
    pub fn from_json(path: &Path, text: &str) -> Result<Self, InputError> {
        let value: serde_json::Value = serde_json::from_str(text)
            .map_err(|e| InputError::new(path, format!("is not valid JSON: {e}")))?;
        let value = migrate(value).map_err(|m| InputError::new(path, m))?;
        let manifest: Manifest = serde_json::from_value(value)
            .map_err(|e| InputError::new(path, format!("is not a valid session manifest: {e}")))?;
        manifest.check().map_err(|m| InputError::new(path, m))?;
        Ok(manifest)
    }

    /// Checks every value read from a manifest against its range, before anything is sized
    /// from it; the error names the field.
    pub fn check(&self) -> Result<(), String> {
        self.setup.validate().map_err(|m| format!("setup: {m}"))?;
        if let Some(f) = &self.fit {
            f.validate().map_err(|m| format!("fit: {m}"))?;
        }
        if let Some(st) = &self.model {
            st.validate().map_err(|m| format!("model: {m}"))?;
        }
        if self.stations.len() > MAX_STATIONS || self.recordings.len() > MAX_STATIONS {
            return Err(format!("more than {MAX_STATIONS} stations or recordings"));
        }
        for s in &self.stations {
            if !(s.position_m.is_finite() && s.position_m.abs() <= 1000.0) {
                return Err(format!(
                    "stations: station {} position {} m is not a position on a part (±1000 m)",
                    s.station,
                    crate::units::show(s.position_m)
                ));
            }
        }
        for r in &self.recordings {
            if !(1..=MAX_SAMPLE_RATE_HZ).contains(&r.sample_rate_hz) {
                return Err(format!(
                    "recordings: {}: sample rate {} Hz out of range (1 to {MAX_SAMPLE_RATE_HZ})",
                    r.file, r.sample_rate_hz
                ));
            }
            if !(1..=65535).contains(&r.channels) {
                return Err(format!(
                    "recordings: {}: {} channels out of range (1 to 65535)",
                    r.file, r.channels
                ));
            }
            let width = r.encoding.bytes_per_sample() as u64;
            let need = (r.frames as u64)
                .checked_mul(r.channels as u64)
                .and_then(|v| v.checked_mul(width));
            if need.is_none_or(|n| n > r.bytes) {
                return Err(format!(
                    "recordings: {}: {} frames of {} channels do not fit in its {} bytes",
                    r.file, r.frames, r.channels, r.bytes
                ));
            }
            if r.file.contains("..") || Path::new(&r.file).is_absolute() {
                return Err(format!(
                    "recordings: {}: a raw file must lie inside the session folder",
                    r.file
                ));
            }
        }
        for r in &self.runs {
            if !(1..=MAX_SAMPLE_RATE_HZ).contains(&r.sample_rate_hz)
                || r.tach_channel == r.channel
                || r.tach_channel.max(r.channel) > 65534
                || !(1..=360).contains(&r.pulses_per_rev)
                || !(r.full_scale_volts.is_finite() && r.full_scale_volts > 0.0)
                || r.sensitivity_mv_per_unit
                    .is_some_and(|v| !(v.is_finite() && v > 0.0))
            {
                return Err(format!(
                    "runs: {}: rate, channels, pulses per revolution, full scale or sensitivity \
                     out of range",
                    r.file
                ));
            }
            if r.file.contains("..") || Path::new(&r.file).is_absolute() {
                return Err(format!(
                    "runs: {}: a run's file must lie inside the session folder",
                    r.file
                ));
            }
        }
        let r = &self.report;
        if r.instruments.len() > 200
            || [
                &r.operator,
                &r.reviewer,
                &r.site,
                &r.test_date,
                &r.conditioning,
                &r.support,
            ]
            .iter()
            .any(|t| t.len() > 2000)
        {
            return Err("report: too many instruments or too long a text".into());
        }
        if self.hits.len() > MAX_STATIONS * MAX_HITS_PER_STATION {
            return Err(format!("{} hits: too many", self.hits.len()));
        }
        for h in &self.hits {
            if h.index >= MAX_HITS_PER_STATION || !(h.time_s.is_finite() && h.time_s >= 0.0) {
                return Err(format!(
                    "hits: station {} hit index {} at {} s is out of range",
                    h.station, h.index, h.time_s
                ));
            }
        }
        Ok(())
    }
}

/// The most stations (and recordings) a session may hold.
pub const MAX_STATIONS: usize = 10_000;
/// The most hits a station's recording may hold.
pub const MAX_HITS_PER_STATION: usize = 100_000;
/// The highest sample rate accepted, Hz.
pub const MAX_SAMPLE_RATE_HZ: u32 = 10_000_000;

/// An open session.
#[derive(Debug, Clone, PartialEq)]
pub struct Session {
    /// Its folder.
    pub dir: PathBuf,
    /// Its manifest.
    pub manifest: Manifest,
}

impl Session {
    /// True when `dir` holds a session manifest.
    pub fn is_session(dir: &Path) -> bool {
        dir.join(MANIFEST).is_file()
    }

    /// Opens a session, checking the format, the schema version and the raw files.
    pub fn open(dir: &Path) -> Result<Self, InputError> {
        let path = dir.join(MANIFEST);
        let text = std::fs::read_to_string(&path)
            .map_err(|e| InputError::new(&path, format!("cannot read: {e}")))?;
        let manifest = Manifest::from_json(&path, &text)?;
        for r in &manifest.recordings {
            let p = dir.join(&r.file);
            let meta = std::fs::metadata(&p).map_err(|e| {
                InputError::new(
                    &p,
                    format!("raw recording listed in the manifest is missing: {e}"),
                )
            })?;
            if meta.len() != r.bytes {
                return Err(InputError::new(
                    &p,
                    format!(
                        "raw recording is {} bytes but the manifest recorded {}: it was changed after capture",
                        meta.len(),
                        r.bytes
                    ),
                ));
            }
        }
        for r in &manifest.runs {
            let p = dir.join(&r.file);
            let meta = std::fs::metadata(&p).map_err(|e| {
                InputError::new(&p, format!("run listed in the manifest is missing: {e}"))
            })?;
            if meta.len() != r.bytes {
                return Err(InputError::new(
                    &p,
                    format!(
                        "run recording is {} bytes but the manifest recorded {}: it was changed after recording",
                        meta.len(),
                        r.bytes
                    ),
                ));
            }
        }
        Ok(Self {
            dir: dir.to_path_buf(),
            manifest,
        })
    }

    /// Creates an empty session (for live capture) in a new folder.
    pub fn create(dir: &Path, setup: Setup, part: Part) -> Result<Self, InputError> {
        if dir.join(MANIFEST).exists() {
            return Err(InputError::new(dir, "already holds a session"));
        }
        std::fs::create_dir_all(dir.join("raw"))
            .map_err(|e| InputError::new(dir, format!("cannot create folder: {e}")))?;
        let s = Self {
            dir: dir.to_path_buf(),
            manifest: Manifest::new(part, setup, Vec::new(), Vec::new()),
        };
        s.save()?;
        Ok(s)
    }

    /// Imports a WAV set into a new session folder: copies the recordings into `raw/`
    /// (the originals are only read) and writes the manifest. Hits are filled by the caller.
    pub fn import_wavset(
        set: &WavSet,
        dir: &Path,
        setup: Setup,
        part: Part,
    ) -> Result<Self, InputError> {
        if dir.join(MANIFEST).exists() {
            return Err(InputError::new(
                dir,
                "already holds a session; choose a new folder",
            ));
        }
        let raw = dir.join("raw");
        std::fs::create_dir_all(&raw)
            .map_err(|e| InputError::new(&raw, format!("cannot create folder: {e}")))?;
        let mut recordings = Vec::new();
        let mut stations = Vec::new();
        for s in &set.stations {
            let name = format!("station-{:03}.wav", s.station);
            let dst = raw.join(&name);
            let bytes = crate::atomic::copy_file(&s.path, &dst)
                .map_err(|e| InputError::new(&dst, format!("cannot copy recording: {e}")))?;
            let info = probe(&dst)?;
            recordings.push(Recording {
                station: s.station,
                file: format!("raw/{name}"),
                sample_rate_hz: info.sample_rate_hz,
                channels: info.channels,
                encoding: info.encoding,
                frames: info.frames,
                bytes,
            });
            stations.push(Station {
                station: s.station,
                position_m: s.position_m,
                position_source: s.position_source,
                label: None,
            });
        }
        let session = Self {
            dir: dir.to_path_buf(),
            manifest: Manifest::new(part, setup, stations, recordings),
        };
        session.save()?;
        Ok(session)
    }

    /// Writes the manifest atomically.
    pub fn save(&self) -> Result<(), InputError> {
        let path = self.dir.join(MANIFEST);
        let text = serde_json::to_string_pretty(&self.manifest)
            .map_err(|e| InputError::new(&path, format!("cannot encode manifest: {e}")))?;
        crate::atomic::write_bytes(&path, text.as_bytes())
            .map_err(|e| InputError::new(&path, format!("cannot write: {e}")))
    }

    /// Copies the session (raw recordings byte for byte, then the manifest) into a new folder and
    /// returns the copy; this session is left as it is.
    pub fn save_as(&self, dir: &Path) -> Result<Self, InputError> {
        if dir.join(MANIFEST).exists() {
            return Err(InputError::new(
                dir,
                "already holds a session; choose a new folder",
            ));
        }
        let files = self
            .manifest
            .recordings
            .iter()
            .map(|r| (&r.file, r.bytes))
            .chain(self.manifest.runs.iter().map(|r| (&r.file, r.bytes)));
        for (file, bytes) in files {
            let dst = dir.join(file);
            if let Some(parent) = dst.parent() {
                std::fs::create_dir_all(parent)
                    .map_err(|e| InputError::new(parent, format!("cannot create folder: {e}")))?;
            }
            let n = crate::atomic::copy_file(&self.dir.join(file), &dst)
                .map_err(|e| InputError::new(&dst, format!("cannot copy recording: {e}")))?;
            if n != bytes {
                return Err(InputError::new(
                    &dst,
                    format!("copied {n} bytes, the manifest records {bytes}"),
                ));
            }
        }
        let copy = Self {
            dir: dir.to_path_buf(),
            manifest: self.manifest.clone(),
        };
        copy.save()?;
        Ok(copy)
    }

    /// The test to analyse: every station's recording with its saved overrides.
    pub fn dataset(&self) -> Dataset {
        let ov = self.overrides();
        let stations = self
            .manifest
            .stations
            .iter()
            .filter_map(|st| {
                let rec = self
                    .manifest
                    .recordings
                    .iter()
                    .find(|r| r.station == st.station)?;
                Some(StationSource {
                    station: st.station,
                    position_m: st.position_m,
                    position_source: st.position_source,
                    path: self.dir.join(&rec.file),
                    overrides: ov.get(&st.station).cloned().unwrap_or_default(),
                })
            })
            .collect();
        Dataset {
            stations,
            origin: self.dir.clone(),
        }
    }
    /// Overrides saved for each station: hit index → accept.
    pub fn overrides(&self) -> BTreeMap<u32, BTreeMap<usize, bool>> {
        let mut out: BTreeMap<u32, BTreeMap<usize, bool>> = BTreeMap::new();
        for h in &self.manifest.hits {
            if let Some(v) = h.override_accept {
                out.entry(h.station).or_default().insert(h.index, v);
            }
        }
        out
    }

    /// Sets (or clears, with `None`) a person's verdict on a hit; the caller re-analyses and saves.
    pub fn set_override(
        &mut self,
        station: u32,
        index: usize,
        accept: Option<bool>,
    ) -> Result<(), String> {
        let h = self
            .manifest
            .hits
            .iter_mut()
            .find(|h| h.station == station && h.index == index)
            .ok_or_else(|| format!("station {station} has no hit {index}"))?;
        h.override_accept = accept;
        Ok(())
    }
}

/// Brings a manifest of an older schema up to [`SCHEMA_VERSION`], or says why it cannot.
fn migrate(value: serde_json::Value) -> Result<serde_json::Value, String> {
    let format = value.get("format").and_then(|v| v.as_str());
    if format != Some(FORMAT) {
        return Err(format!(
            "is not a tapgrid session manifest (format {format:?}, expected {FORMAT:?})"
        ));
    }
    match value.get("schema_version").and_then(|v| v.as_u64()) {
        Some(v) if v == SCHEMA_VERSION as u64 => Ok(value),
        // Schema 1 had no shaft model; nothing else changed.
        Some(1) => {
            let mut value = value;
            value["schema_version"] = SCHEMA_VERSION.into();
            Ok(value)
        }
        Some(v) if v > SCHEMA_VERSION as u64 => Err(format!(
            "was written with session schema {v}, newer than this tapgrid reads ({SCHEMA_VERSION}); update tapgrid"
        )),
        Some(v) => Err(format!(
            "session schema {v} is not known to this tapgrid (it reads {SCHEMA_VERSION})"
        )),
        None => Err("has no schema_version".into()),
    }
}

/// An analysis's hits in the form saved in a session manifest.
pub fn saved_hits(a: &Analysis) -> Vec<SavedHit> {
    a.stations
        .iter()
        .flat_map(|s| {
            s.result.hits.iter().map(move |h| SavedHit {
                station: s.station,
                index: h.index,
                time_s: h.time_s,
                accepted: h.accepted,
                reasons: h.reasons.clone(),
                override_accept: h.override_accept,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A schema-1 manifest (no shaft model) opens as schema 2 with no model; an unknown future
    /// schema is refused with the reason.
    #[test]
    fn schema_1_is_migrated() {
        let text = include_str!("../../sample-sessions/pump-shaft/session.json");
        let mut v: serde_json::Value = serde_json::from_str(text).expect("bundled manifest");
        v["schema_version"] = 1.into();
        if let Some(o) = v.as_object_mut() {
            o.remove("model");
        }
        let m: Manifest = serde_json::from_value(migrate(v.clone()).expect("migrates"))
            .expect("reads after migration");
        assert_eq!(m.schema_version, SCHEMA_VERSION);
        assert!(m.model.is_none());
        v["schema_version"] = 3.into();
        let e = migrate(v).expect_err("newer schema refused");
        assert!(e.contains("newer"), "{e}");
    }
}

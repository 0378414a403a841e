//! What a view asks for, carried out after the frame.

use super::*;

/// What a view asks for; applied after the frame.
#[derive(Debug, Clone, PartialEq)]
pub enum Command {
    /// Open a session or WAV set folder.
    Open(PathBuf),
    /// Write the session.
    Save,
    /// Write the test as a session in a new folder.
    SaveAs(PathBuf),
    /// Ask for a path (open, import, save as).
    AskPath(PathPurpose),
    /// Show a view.
    Show(View),
    /// Go to a station.
    GoStation(u32),
    /// Next station.
    NextStation,
    /// Previous station.
    PrevStation,
    /// Next hit of the station.
    NextHit,
    /// Previous hit.
    PrevHit,
    /// Select a hit.
    SelectHit(usize),
    /// A person's verdict on a hit (`None` = back to automatic).
    SetVerdict {
        /// Station.
        station: u32,
        /// Hit index.
        hit: usize,
        /// Accept, reject or automatic.
        accept: Option<bool>,
    },
    /// Verdict on the current hit.
    VerdictCurrent(bool),
    /// The setup changed: analyse again.
    Reanalyse,
    /// Analyse the test in this layout (the hint when channel A rings like an accelerometer).
    UseLayout(crate::setup::Layout),
    /// Take or drop the mode of the pole column nearest this frequency (Hz), within a tolerance.
    TogglePole {
        /// Frequency clicked, Hz.
        frequency_hz: f64,
        /// Half-width of the column, Hz.
        tolerance_hz: f64,
    },
    /// Back to the automatic pole choice.
    AutoPoles,
    /// Fit band (`None`: the analysis band); fits again.
    SetFitBand(Option<[f64; 2]>),
    /// Play or pause the animation.
    TogglePlay,
    /// Open or close the help.
    ToggleHelp,
    /// Choose the mode to animate.
    SelectMode(usize),
    /// Choose the model mode to animate.
    SelectModelMode(usize),
    /// The setup view's edited copy of the setup, part, labels and positions.
    EditSetup(Box<SetupEdit>),
    /// The model editors' edited copy of the shaft model and its service questions: solve again.
    EditStudy(Box<Study>),
    /// Start capturing into the open session (when it is writable) or a new folder.
    StartCapture,
    /// Tell the running capture something.
    CaptureControl(super::capture_thread::Control),
    /// List the audio inputs again.
    ListDevices,
    /// Read a shaft model (JSON) into the test.
    LoadModel(PathBuf),
    /// Write the shaft model as JSON.
    WriteModel(PathBuf),
    /// Write the test report (HTML) of what the window shows.
    WriteReport(PathBuf),
    /// A first model: a uniform steel shaft over the stations, free-free.
    NewModel,
    /// Read a rotor file's bearings, unbalances and range as the service rotor.
    LoadRotor(PathBuf),
    /// Back to the bearings in service as plain springs.
    ClearRotor,
    /// Track a run-up or coast-down recording.
    LoadRun(PathBuf),
    /// Start recording a run from the input (the run view's choices).
    RecordRun,
    /// Stop recording the run (it is saved, then tracked).
    StopRecordRun,
    /// Compare the open test with the test in this folder.
    LoadCompare(PathBuf),
    /// The report's test record as edited.
    EditReportInfo(Box<crate::session::ReportInfo>),
}

/// Where a report goes by default: beside a session or WAV set (a session's own folder holds only
/// what the session format defines), or in the working folder for the read-only demo.
pub(super) fn report_default_path(d: &Document) -> PathBuf {
    let name = d
        .path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "test".into());
    let dir = if d.read_only {
        std::env::current_dir().unwrap_or_default()
    } else {
        d.path.parent().map(Path::to_path_buf).unwrap_or_default()
    };
    dir.join(format!("{name}-report.html"))
}

/// Why a path is being asked for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PathPurpose {
    /// Open a session or WAV set.
    Open,
    /// Import (replay) a WAV set.
    Import,
    /// Save as a new session.
    SaveAs,
    /// Read a shaft model file.
    LoadModel,
    /// Write the shaft model file.
    WriteModel,
    /// Write the test report.
    WriteReport,
    /// Read a rotor file (bearings, unbalances).
    LoadRotor,
    /// Read a run recording (WAV).
    LoadRun,
    /// Another test to compare with.
    LoadCompare,
}

pub(super) struct PathDialog {
    pub(super) purpose: PathPurpose,
    pub(super) text: String,
    /// The folder listed under the path, read when the folder changes.
    pub(super) listing: Option<Listing>,
}

/// One folder's entries for the path dialog's browser.
pub(super) struct Listing {
    /// The path text it was read for (the folder is worked out again only when that changes).
    pub(super) for_text: String,
    pub(super) dir: PathBuf,
    pub(super) entries: Vec<(String, EntryKind)>,
    pub(super) error: Option<String>,
}

/// What an entry of the browser is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum EntryKind {
    /// A tapgrid session (holds `session.json`).
    Session,
    /// A WAV set (holds `stations.csv`).
    WavSet,
    /// Another folder.
    Folder,
    /// A file of the kind asked for.
    File,
}

impl Listing {
    /// Reads `dir`: folders, sessions and WAV sets first, then files ending in `ext` (if any);
    /// hidden entries left out.
    pub(super) fn read(for_text: &str, dir: &Path, ext: Option<&str>) -> Self {
        let mut entries = Vec::new();
        let error = match std::fs::read_dir(dir) {
            Err(e) => Some(format!("cannot list {}: {e}", dir.display())),
            Ok(rd) => {
                for e in rd.flatten().take(2000) {
                    let name = e.file_name().to_string_lossy().into_owned();
                    if name.starts_with('.') {
                        continue;
                    }
                    let path = e.path();
                    let kind = if path.is_dir() {
                        if path.join("session.json").is_file() {
                            EntryKind::Session
                        } else if path.join("stations.csv").is_file() {
                            EntryKind::WavSet
                        } else {
                            EntryKind::Folder
                        }
                    } else if ext.is_some_and(|x| name.to_ascii_lowercase().ends_with(x)) {
                        EntryKind::File
                    } else {
                        continue;
                    };
                    entries.push((name, kind));
                }
                None
            }
        };
        entries.sort_by(|a, b| {
            let is_file = |k: EntryKind| k == EntryKind::File;
            is_file(a.1)
                .cmp(&is_file(b.1))
                .then(a.0.to_lowercase().cmp(&b.0.to_lowercase()))
        });
        Self {
            for_text: for_text.to_string(),
            dir: dir.to_path_buf(),
            entries,
            error,
        }
    }
}

/// A line in the message bar.
#[derive(Debug, Clone, PartialEq)]
pub struct Message {
    /// Text.
    pub text: String,
    /// An error (else a notice).
    pub error: bool,
}

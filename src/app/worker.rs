//! The background worker: opening, analysis, fitting and trace loading run on one named thread
//! so the UI never waits. Jobs go in by channel; outcomes come back by a bounded channel and each
//! one asks for a repaint. A job made stale by a newer request of its kind is skipped.

use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::mpsc::{Receiver, Sender, SyncSender};

use crate::acquire::wav::Decoder;
use crate::analysis::{self, Analysis, Dataset};
use crate::estimate::lscf::Stabilization;
use crate::modal::{self, FrfSet, ModalResult, ModalSettings};
use crate::model::study::{Study, StudyResult, TestModes};
use crate::session::Session;
use crate::setup::Setup;
use crate::signal::{HitReport, HitTraces, hit_traces};

/// Work for the background thread.
pub enum Job {
    /// Open a session or WAV set folder.
    Open(PathBuf),
    /// Analyse a test and fit it.
    Analyze {
        /// Request number; older ones are skipped.
        generation: u64,
        /// The test.
        data: Dataset,
        /// Its setup.
        setup: Setup,
        /// Modal settings.
        modal: ModalSettings,
    },
    /// Fit (again) FRFs already computed: automatically, or with the poles a person picked.
    Fit {
        /// Request number; older ones are skipped.
        generation: u64,
        /// The FRFs.
        frfs: Arc<FrfSet>,
        /// Modal settings.
        modal: ModalSettings,
        /// A diagram and the indices of its poles to keep (`None`: automatic choice).
        picked: Option<(Arc<Stabilization>, Vec<usize>)>,
    },
    /// Decode one station's recording and cut its hits for display.
    Traces {
        /// Station.
        station: u32,
        /// Its recording.
        path: PathBuf,
        /// Setup.
        setup: Setup,
        /// Its hits as analysed.
        hits: Vec<HitReport>,
    },
    /// List the audio inputs (slow on ALSA, so never on the UI thread).
    ListDevices,
    /// Evaluate the shaft model study against the test's modes.
    Study {
        /// Request number; older ones are skipped.
        generation: u64,
        /// The study.
        study: Box<Study>,
        /// The test's modes, when fitted.
        test: Option<TestModes>,
    },
    /// Copy a session to a new folder.
    SaveAs {
        /// The session as it should be written.
        session: Box<Session>,
        /// New folder.
        dir: PathBuf,
    },
    /// Write a session's manifest in place (`announce`: say so when done).
    SaveSession {
        /// The session as it should be written.
        session: Box<Session>,
        /// A person asked for it (else an autosave, done quietly).
        announce: bool,
    },
    /// Read a session again (after a capture wrote it).
    Reopen(PathBuf),
    /// Read a shaft model JSON file.
    ReadShaft(PathBuf),
    /// Read a rotor file (shaft, bearings, unbalances).
    ReadRotor(PathBuf),
    /// Write bytes to a file atomically; `what` names it in the message.
    WriteFile {
        /// Where.
        path: PathBuf,
        /// What.
        bytes: Vec<u8>,
        /// Its name for the message.
        what: &'static str,
    },
    /// Write the HTML test report.
    WriteReport(Box<ReportJob>),
    /// Make a new session from a WAV set.
    CreateSession {
        /// The WAV set folder.
        wavset: PathBuf,
        /// New session folder.
        dir: PathBuf,
        /// Setup.
        setup: Setup,
        /// Part.
        part: crate::session::Part,
        /// Hits with verdicts and overrides.
        hits: Vec<crate::session::SavedHit>,
        /// The shaft model study.
        model: Option<Box<Study>>,
    },
}

/// What came back.
pub enum Outcome {
    /// A folder was opened.
    Opened {
        /// The folder.
        path: PathBuf,
        /// Its test.
        data: Dataset,
        /// The session, when the folder is one.
        session: Option<Box<Session>>,
    },
    /// Analysis and fit of a request.
    Analyzed {
        /// Request number.
        generation: u64,
        /// The analysis.
        analysis: Arc<Analysis>,
        /// Its FRFs (`None` when no station has one).
        frfs: Option<Arc<FrfSet>>,
        /// Mode indicators over the whole band.
        indicators: Option<Arc<modal::Indicators>>,
        /// The fit.
        modal: Result<Arc<ModalResult>, String>,
    },
    /// A fit.
    Fitted {
        /// Request number.
        generation: u64,
        /// The fit.
        modal: Result<Arc<ModalResult>, String>,
    },
    /// A station's hits for display.
    Traces {
        /// Station.
        station: u32,
        /// Hit by hit (`None` when the record did not fit).
        traces: Vec<Option<HitTraces>>,
    },
    /// A session was written to a new folder.
    Saved(Box<Session>),
    /// The audio inputs.
    Devices(Result<Vec<crate::acquire::live::DeviceInfo>, String>),
    /// The shaft model study.
    Studied {
        /// Request number.
        generation: u64,
        /// The result.
        result: Result<Arc<StudyResult>, String>,
    },
    /// A request was superseded and not run.
    Skipped,
    /// A session's manifest was written in place.
    SessionSaved {
        /// The session as written.
        session: Box<Session>,
        /// A person asked for it.
        announce: bool,
    },
    /// A session read again.
    Reopened(Box<Session>),
    /// A shaft model read from a file.
    ShaftRead {
        /// The file.
        path: PathBuf,
        /// The shaft.
        shaft: Box<crate::model::beam::Shaft>,
    },
    /// A rotor file read and checked: its service part and its shaft.
    RotorRead {
        /// The file.
        path: PathBuf,
        /// Bearings, unbalances and range in the rotor file's keys.
        service: serde_json::Value,
        /// The file's shaft (used when the test has no shaft model).
        shaft: Box<crate::model::beam::Shaft>,
    },
    /// A file was written: the message to show.
    Wrote(String),
    /// A job failed; the message names the file.
    Failed {
        /// What was being done.
        what: &'static str,
        /// Why it failed.
        message: String,
    },
}

/// What the report needs, owned so the worker can write it while the window goes on.
pub struct ReportJob {
    /// Where.
    pub path: PathBuf,
    /// Part name and notes.
    pub part: crate::session::Part,
    /// The test's folder.
    pub source: PathBuf,
    /// The analysis.
    pub analysis: Arc<Analysis>,
    /// The fit (empty when none).
    pub modes: Option<Arc<ModalResult>>,
    /// The model study and its result, when there is one.
    pub study: Option<(Study, Arc<StudyResult>)>,
    /// The session's runs.
    pub runs: Vec<crate::report::runs::RunSource>,
    /// Who tested, where, with what.
    pub info: crate::session::ReportInfo,
}

/// Handle to the worker thread.
pub struct Worker {
    jobs: Sender<Job>,
    outcomes: Receiver<Outcome>,
    latest_analysis: Arc<AtomicU64>,
    latest_fit: Arc<AtomicU64>,
    latest_study: Arc<AtomicU64>,
    generation: u64,
    in_flight: Vec<&'static str>,
}

impl Worker {
    /// Starts the thread; `repaint` is called after each outcome is sent.
    pub fn start(repaint: impl Fn() + Send + 'static) -> Self {
        let (jobs, job_rx) = std::sync::mpsc::channel::<Job>();
        let (out_tx, outcomes) = std::sync::mpsc::sync_channel::<Outcome>(8);
        let latest_analysis = Arc::new(AtomicU64::new(0));
        let latest_fit = Arc::new(AtomicU64::new(0));
        let latest_study = Arc::new(AtomicU64::new(0));
        let latest = Latest {
            analysis: latest_analysis.clone(),
            fit: latest_fit.clone(),
            study: latest_study.clone(),
        };
        // If the thread cannot start the UI still runs; every job then reports it failed.
        let _ = std::thread::Builder::new()
            .name("tapgrid-worker".into())
            .spawn(move || work(job_rx, out_tx, latest, repaint));
        Self {
            jobs,
            outcomes,
            latest_analysis,
            latest_fit,
            latest_study,
            generation: 0,
            in_flight: Vec::new(),
        }
    }

    /// A fresh request number for an analysis or fit (supersedes earlier ones of its kind).
    pub fn next_generation(&mut self) -> u64 {
        self.generation += 1;
        self.generation
    }

    /// Sends a job.
    pub fn send(&mut self, job: Job) {
        let what = describe(&job);
        match &job {
            Job::Analyze { generation, .. } => {
                self.latest_analysis.store(*generation, Ordering::SeqCst);
                // A new analysis also supersedes any fit of the old FRFs.
                self.latest_fit.store(*generation, Ordering::SeqCst);
            }
            Job::Fit { generation, .. } => self.latest_fit.store(*generation, Ordering::SeqCst),
            Job::Study { generation, .. } => self.latest_study.store(*generation, Ordering::SeqCst),
            _ => {}
        }
        if self.jobs.send(job).is_ok() {
            self.in_flight.push(what);
        }
    }

    /// The next outcome, if one is waiting.
    pub fn try_recv(&mut self) -> Option<Outcome> {
        let o = self.outcomes.try_recv().ok()?;
        if !self.in_flight.is_empty() {
            self.in_flight.remove(0);
        }
        Some(o)
    }

    /// What the worker is doing (oldest pending job first), if anything.
    pub fn busy(&self) -> Option<&'static str> {
        self.in_flight.first().copied()
    }

    /// Whether a request of this generation is still the latest analysis.
    pub fn is_latest_analysis(&self, generation: u64) -> bool {
        self.latest_analysis.load(Ordering::SeqCst) == generation
    }

    /// Whether a request of this generation is still the latest model study.
    pub fn is_latest_study(&self, generation: u64) -> bool {
        self.latest_study.load(Ordering::SeqCst) == generation
    }

    /// Whether a request of this generation is still the latest fit.
    pub fn is_latest_fit(&self, generation: u64) -> bool {
        self.latest_fit.load(Ordering::SeqCst) == generation
    }
}

fn describe(job: &Job) -> &'static str {
    match job {
        Job::Open(_) => "Opening",
        Job::Analyze { .. } => "Analysing",
        Job::Fit { .. } => "Fitting",
        Job::Traces { .. } => "Loading hits",
        Job::SaveAs { .. } | Job::CreateSession { .. } | Job::SaveSession { .. } => "Saving",
        Job::Reopen(_) => "Reading the session",
        Job::ReadShaft(_) => "Reading the shaft model",
        Job::ReadRotor(_) => "Reading the rotor file",
        Job::WriteFile { .. } => "Writing",
        Job::WriteReport(_) => "Writing the report",
        Job::ListDevices => "Listing audio inputs",
        Job::Study { .. } => "Solving the shaft model",
    }
}

/// The latest request of each kind that supersedes older ones.
struct Latest {
    analysis: Arc<AtomicU64>,
    fit: Arc<AtomicU64>,
    study: Arc<AtomicU64>,
}

fn work(jobs: Receiver<Job>, out: SyncSender<Outcome>, latest: Latest, repaint: impl Fn()) {
    let mut decoder = Decoder::default();
    let mut model_cache = crate::model::study::ModelCache::default();
    while let Ok(job) = jobs.recv() {
        let what = describe(&job);
        // A bug that panics inside one job must not take the worker down with it (later jobs
        // would be dropped and the window would say "Analysing…" for ever): the job is reported
        // failed and the worker goes on with a fresh decoder and model cache (whatever the job
        // left half-done in them is not to be trusted).
        let (outcome, panicked) = guarded(what, || {
            run_job(job, &latest, &mut decoder, &mut model_cache)
        });
        if panicked {
            decoder = Decoder::default();
            model_cache = Default::default();
        }
        if out.send(outcome).is_err() {
            return;
        }
        repaint();
    }
}

fn run_job(
    job: Job,
    latest: &Latest,
    decoder: &mut Decoder,
    model_cache: &mut crate::model::study::ModelCache,
) -> Outcome {
    match job {
        Job::Open(path) => open(path),
        Job::Analyze {
            generation,
            data,
            setup,
            modal,
        } => {
            if latest.analysis.load(Ordering::SeqCst) != generation {
                Outcome::Skipped
            } else {
                analyze(generation, &data, &setup, &modal)
            }
        }
        Job::Fit {
            generation,
            frfs,
            modal,
            picked,
        } => {
            if latest.fit.load(Ordering::SeqCst) != generation {
                Outcome::Skipped
            } else {
                let r = match &picked {
                    Some((stab, idx)) => modal::modes_from_poles(&frfs, &modal, stab, idx),
                    None => modal::extract(&frfs, &modal),
                };
                Outcome::Fitted {
                    generation,
                    modal: r.map(Arc::new),
                }
            }
        }
        Job::Traces {
            station,
            path,
            setup,
            hits,
        } => match decoder.decode(&path, setup.channel_a.index, setup.channel_b.index) {
            Ok(info) => Outcome::Traces {
                station,
                traces: hits
                    .iter()
                    .map(|h| hit_traces(&decoder.a, &decoder.b, info.sample_rate_hz, &setup, h))
                    .collect(),
            },
            Err(e) => Outcome::Failed {
                what: "Loading hits",
                message: e.to_string(),
            },
        },
        Job::ListDevices => {
            Outcome::Devices(crate::acquire::live::list_inputs().map_err(|e| e.to_string()))
        }
        Job::Study {
            generation,
            study,
            test,
        } => {
            if latest.study.load(Ordering::SeqCst) != generation {
                Outcome::Skipped
            } else {
                Outcome::Studied {
                    generation,
                    result: crate::pipeline::study_cached(&study, test.as_ref(), model_cache)
                        .map(Arc::new),
                }
            }
        }
        Job::SaveAs { session, dir } => match session.save_as(&dir) {
            Ok(s) => Outcome::Saved(Box::new(s)),
            Err(e) => Outcome::Failed {
                what: "Saving",
                message: e.to_string(),
            },
        },
        Job::CreateSession {
            wavset,
            dir,
            setup,
            part,
            hits,
            model,
        } => create_session(&wavset, &dir, setup, part, hits, model),
        Job::SaveSession { session, announce } => match session.save() {
            Ok(()) => Outcome::SessionSaved { session, announce },
            Err(e) => Outcome::Failed {
                what: "Saving",
                message: e.to_string(),
            },
        },
        Job::Reopen(dir) => match Session::open(&dir) {
            Ok(s) => Outcome::Reopened(Box::new(s)),
            Err(e) => Outcome::Failed {
                what: "Reading the session",
                message: e.to_string(),
            },
        },
        Job::ReadShaft(path) => match crate::model::run::read_shaft(&path) {
            Ok(shaft) => Outcome::ShaftRead {
                path,
                shaft: Box::new(shaft),
            },
            Err(e) => Outcome::Failed {
                what: "Reading the shaft model",
                message: e.to_string(),
            },
        },
        Job::ReadRotor(path) => match crate::rotor::file::read_rotor(&path) {
            Ok(f) => Outcome::RotorRead {
                path,
                service: f.service,
                shaft: Box::new(f.rotor.shaft),
            },
            Err(e) => Outcome::Failed {
                what: "Reading the rotor file",
                message: e.to_string(),
            },
        },
        Job::WriteFile { path, bytes, what } => match crate::atomic::write_bytes(&path, &bytes) {
            Ok(()) => Outcome::Wrote(format!("wrote the {what} to {}", path.display())),
            Err(e) => Outcome::Failed {
                what: "Writing",
                message: format!("{}: cannot write: {e}", path.display()),
            },
        },
        Job::WriteReport(r) => write_report(&r),
    }
}

fn write_report(r: &ReportJob) -> Outcome {
    let empty = ModalResult::default();
    let written = crate::report::document::utc_now();
    let rotor = match r
        .study
        .as_ref()
        .and_then(|(s, _)| crate::report::document::rotor_for_report(s))
    {
        Some(Ok(at)) => Some(at),
        Some(Err(e)) => {
            return Outcome::Failed {
                what: "Writing the report",
                message: format!("the rotor at speed cannot be solved: {e}"),
            };
        }
        None => None,
    };
    let runs = crate::report::runs::track_runs(&r.runs, r.study.as_ref().map(|(s, _)| s));
    let input = crate::report::document::ReportInput {
        info: Some(&r.info),
        runs: &runs,
        part: &r.part.name,
        notes: &r.part.notes,
        source: &r.source,
        analysis: &r.analysis,
        modes: r.modes.as_deref().unwrap_or(&empty),
        study: r.study.as_ref().map(|(s, res)| (s, res.as_ref())),
        written_utc: &written,
        rotor: rotor.as_ref(),
    };
    let pdf = r
        .path
        .extension()
        .is_some_and(|e| e.eq_ignore_ascii_case("pdf"));
    let written = if pdf {
        crate::report::pdf::write_pdf(&r.path, &input)
    } else {
        crate::report::document::write_html(&r.path, &input)
    };
    match written {
        Ok(()) => Outcome::Wrote(format!("wrote the report to {}", r.path.display())),
        Err(e) => Outcome::Failed {
            what: "Writing the report",
            message: e.to_string(),
        },
    }
}

/// Runs a job, turning a panic into a failed outcome that says so; `true` when it panicked.
fn guarded(what: &'static str, job: impl FnOnce() -> Outcome) -> (Outcome, bool) {
    match std::panic::catch_unwind(std::panic::AssertUnwindSafe(job)) {
        Ok(o) => (o, false),
        Err(panic) => (
            Outcome::Failed {
                what,
                message: format!(
                    "internal error ({}); nothing was changed on disk and the next request will run \
                 — please report this with the input that caused it",
                    panic_text(panic.as_ref())
                ),
            },
            true,
        ),
    }
}

/// The message of a panic payload.
fn panic_text(p: &(dyn std::any::Any + Send)) -> String {
    p.downcast_ref::<&str>()
        .map(|s| (*s).to_string())
        .or_else(|| p.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "a panic without a message".into())
}

fn open(path: PathBuf) -> Outcome {
    match crate::pipeline::open_dataset(&path, Setup::default().spacing_m) {
        Ok((data, session)) => Outcome::Opened {
            path,
            data,
            session: session.map(Box::new),
        },
        Err(e) => Outcome::Failed {
            what: "Opening",
            message: e.to_string(),
        },
    }
}

fn analyze(generation: u64, data: &Dataset, setup: &Setup, m: &ModalSettings) -> Outcome {
    match analysis::run(data, setup) {
        Ok(a) => {
            let frfs = FrfSet::from_analysis(&a).map(Arc::new);
            let indicators = frfs.as_ref().map(|f| Arc::new(modal::indicators(f)));
            let modal = match &frfs {
                Some(f) => modal::extract(f, m).map(Arc::new),
                None => Err("no station has an accepted hit".into()),
            };
            Outcome::Analyzed {
                generation,
                analysis: Arc::new(a),
                frfs,
                indicators,
                modal,
            }
        }
        Err(e) => Outcome::Failed {
            what: "Analysing",
            message: e.to_string(),
        },
    }
}

fn create_session(
    wavset: &std::path::Path,
    dir: &std::path::Path,
    setup: Setup,
    part: crate::session::Part,
    hits: Vec<crate::session::SavedHit>,
    model: Option<Box<Study>>,
) -> Outcome {
    let r = crate::acquire::wavset::WavSet::scan(wavset, setup.spacing_m).and_then(|set| {
        let mut s = Session::import_wavset(&set, dir, setup, part)?;
        s.manifest.hits = hits;
        s.manifest.model = model.map(|m| *m);
        s.save()?;
        Ok(s)
    });
    match r {
        Ok(s) => Outcome::Saved(Box::new(s)),
        Err(e) => Outcome::Failed {
            what: "Saving",
            message: e.to_string(),
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_panicking_job_becomes_a_failed_outcome_and_the_next_one_runs() {
        let (o, panicked) = guarded("Analysing", || panic!("index out of bounds"));
        assert!(panicked);
        match o {
            Outcome::Failed { what, message } => {
                assert_eq!(what, "Analysing");
                assert!(message.contains("index out of bounds"), "{message}");
            }
            _ => panic!("expected a failed outcome"),
        }
        assert!(matches!(
            guarded("Fitting", || Outcome::Skipped),
            (Outcome::Skipped, false)
        ));
    }
}

//! The desktop GUI (eframe + egui_plot). The only layer that knows egui.
//!
//! Shape of the code: [`TapgridApp`] holds a persisted [`Settings`] and runtime state beside it;
//! views draw and push [`Command`]s, which [`TapgridApp::apply`] carries out after the frame; the
//! numeric work runs on the [`worker`] thread and comes back through [`TapgridApp::logic`].

mod capture_thread;
mod capture_view;
mod fit_view;
mod frf_view;
mod help;
mod hits_view;
mod margin_view;
mod model_edit;
mod model_view;
mod modes_view;
pub mod plots;
mod setup_view;
mod station_map;
pub mod worker;

use std::collections::BTreeSet;
use std::path::{Path, PathBuf};
use std::sync::{Arc, OnceLock};

use eframe::egui;
use serde::{Deserialize, Serialize};

use crate::analysis::{Analysis, Dataset};
use crate::modal::{FrfSet, ModalResult, ModalSettings, Selection};
use crate::model::study::{Study, StudyResult, TestModes};
use crate::session::{Part, Session};
use crate::setup::Setup;
use crate::signal::HitTraces;
use worker::{Job, Outcome, Worker};

/// Key under which [`Settings`] persist in eframe's storage.
pub const SETTINGS_KEY: &str = "tapgrid-settings";

/// The views, in the order of their tabs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
pub enum View {
    /// Part, stations, channels, trigger, windows, band.
    Setup,
    /// The part's outline with a cell per station.
    #[default]
    Stations,
    /// The current station's hits.
    Hits,
    /// Magnitude, phase, coherence.
    Frf,
    /// Stabilization diagram.
    Fit,
    /// Mode table, animation, MAC.
    Modes,
    /// Live capture from an audio interface.
    Capture,
    /// The shaft model: drawing, model against test modes, correlation.
    Model,
    /// Support-stiffness map and running-speed margins.
    Margins,
}

impl View {
    /// All views in tab order.
    pub const ALL: [View; 9] = [
        View::Capture,
        View::Setup,
        View::Stations,
        View::Hits,
        View::Frf,
        View::Fit,
        View::Modes,
        View::Model,
        View::Margins,
    ];

    /// Tab label.
    pub fn label(self) -> &'static str {
        match self {
            View::Setup => "Test setup",
            View::Stations => "Station map",
            View::Hits => "Hit check",
            View::Frf => "FRF review",
            View::Fit => "Pole picking",
            View::Modes => "Mode shapes",
            View::Capture => "Live capture",
            View::Model => "Shaft model",
            View::Margins => "Speed margins",
        }
    }

    /// The view named on the command line (`tapgrid --view margins`).
    pub fn from_name(name: &str) -> Option<View> {
        Some(match name {
            "capture" => View::Capture,
            "setup" => View::Setup,
            "stations" => View::Stations,
            "hits" => View::Hits,
            "frf" => View::Frf,
            "poles" => View::Fit,
            "modes" => View::Modes,
            "model" => View::Model,
            "margins" => View::Margins,
            _ => return None,
        })
    }

    /// Views that animate mode shapes.
    pub fn animates(self) -> bool {
        matches!(self, View::Modes | View::Model)
    }
}

/// What persists between runs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Settings {
    /// Dark theme.
    pub dark: bool,
    /// View shown.
    pub view: View,
    /// Recently opened folders, newest first.
    pub recent: Vec<PathBuf>,
    /// The safety cautions were read (first start shows them).
    pub cautions_read: bool,
    /// Logarithmic frequency axes.
    pub log_frequency: bool,
    /// Overlay every station in the FRF review.
    pub overlay_all: bool,
    /// Animation amplitude, fraction of the plot's half-height.
    pub amplitude: f32,
    /// Animation speed, cycles per second.
    pub speed_hz: f32,
    /// Show the phase plot in the FRF review.
    pub show_phase: bool,
    /// Capture input, remembered by its id (not its index).
    pub capture_device: Option<String>,
    /// Accepted hits that finish a station.
    pub hits_per_station: usize,
    /// Arm the next station when one is done.
    pub auto_advance: bool,
    /// Order of the stations for auto-advance (`1-10`, `10-1`, `1,3,5-8`; empty: ascending).
    pub station_order: String,
    /// Capture sample rate, Hz (`None`: the device's default).
    pub capture_rate_hz: Option<u32>,
    /// Frames per audio callback.
    pub capture_buffer_frames: u32,
}

impl Default for Settings {
    fn default() -> Self {
        Self {
            dark: true,
            view: View::Stations,
            recent: Vec::new(),
            cautions_read: false,
            log_frequency: false,
            overlay_all: false,
            amplitude: 0.8,
            speed_hz: 0.5,
            show_phase: true,
            capture_device: None,
            hits_per_station: 3,
            auto_advance: true,
            station_order: String::new(),
            capture_rate_hz: None,
            capture_buffer_frames: 1024,
        }
    }
}

/// The open test and what has been computed from it.
pub struct Document {
    /// Folder it came from.
    pub path: PathBuf,
    /// The session, when the folder is one (else a WAV set being replayed).
    pub session: Option<Session>,
    /// The recordings.
    pub data: Dataset,
    /// Setup being edited (the analysis follows it).
    pub setup: Setup,
    /// Part.
    pub part: Part,
    /// Station labels (by station number).
    pub labels: std::collections::BTreeMap<u32, String>,
    /// Modal settings.
    pub modal_settings: ModalSettings,
    /// Latest analysis.
    pub analysis: Option<Arc<Analysis>>,
    /// Its FRFs.
    pub frfs: Option<Arc<FrfSet>>,
    /// Mode indicators of those FRFs over the whole band.
    pub indicators: Option<Arc<crate::modal::Indicators>>,
    /// Latest fit.
    pub modal: Option<Arc<ModalResult>>,
    /// Why the latest fit failed.
    pub modal_error: Option<String>,
    /// Why the latest analysis failed.
    pub analysis_error: Option<String>,
    /// Poles a person picked (indices into the diagram); `None` = automatic choice.
    pub picked: Option<Vec<usize>>,
    /// The shaft model and its service questions.
    pub study: Option<Study>,
    /// Its latest evaluation.
    pub study_result: Option<Arc<StudyResult>>,
    /// Why the latest evaluation failed.
    pub study_error: Option<String>,
    /// Never written back: the bundled demo, or a session another program holds.
    pub read_only: bool,
    /// Who holds the session when this window could not take it (then read-only).
    pub locked_by: Option<String>,
    /// This window's hold on the session (one writer at a time); `None` for a WAV set, the demo,
    /// a session held elsewhere, or while a capture writes it.
    pub lock: Option<Arc<crate::session::lock::SessionLock>>,
    /// Changed since the last save.
    pub dirty: bool,
}

impl Document {
    pub(crate) fn new(
        path: PathBuf,
        data: Dataset,
        session: Option<Session>,
        read_only: bool,
    ) -> Self {
        let modal_settings = session
            .as_ref()
            .and_then(|s| s.manifest.fit.clone())
            .unwrap_or_default();
        let (setup, part, labels, study) = match &session {
            Some(s) => (
                s.manifest.setup.clone(),
                s.manifest.part.clone(),
                s.manifest
                    .stations
                    .iter()
                    .filter_map(|st| st.label.clone().map(|l| (st.station, l)))
                    .collect(),
                s.manifest.model.clone(),
            ),
            None => (
                Setup::default(),
                Part {
                    name: path
                        .file_name()
                        .map(|n| n.to_string_lossy().into_owned())
                        .unwrap_or_default(),
                    notes: String::new(),
                },
                Default::default(),
                None,
            ),
        };
        Self {
            path,
            session,
            data,
            setup,
            part,
            labels,
            modal_settings,
            analysis: None,
            frfs: None,
            indicators: None,
            modal: None,
            modal_error: None,
            analysis_error: None,
            picked: None,
            study,
            study_result: None,
            study_error: None,
            read_only,
            locked_by: None,
            lock: None,
            dirty: false,
        }
    }

    /// The fitted modes as the model study takes them (real shapes at the stations).
    pub fn test_modes(&self) -> Option<TestModes> {
        let m = self.modal.as_ref()?;
        Some(crate::pipeline::test_modes(
            &self.modal_settings,
            &self.setup,
            m,
        ))
    }

    /// Index of a station in the dataset.
    pub fn station_index(&self, station: u32) -> Option<usize> {
        self.data.stations.iter().position(|s| s.station == station)
    }

    /// The analysed station, when analysed.
    pub fn station_analysis(&self, station: u32) -> Option<&crate::analysis::StationAnalysis> {
        self.analysis
            .as_ref()?
            .stations
            .iter()
            .find(|s| s.station == station)
    }

    /// The session manifest as it should be written now.
    /// Takes the session's lock for this window; when another program holds it the document
    /// becomes read-only and says who has it.
    pub(crate) fn take_lock(&mut self) {
        if self.session.is_none() || self.read_only || self.lock.is_some() {
            return;
        }
        match crate::session::lock::SessionLock::acquire(
            &self.path,
            "tapgrid window",
            std::time::Duration::ZERO,
        ) {
            Ok(l) => {
                self.lock = Some(Arc::new(l));
                self.locked_by = None;
            }
            Err(e) => {
                self.read_only = true;
                self.locked_by = Some(
                    crate::session::lock::SessionLock::holder(&self.path)
                        .unwrap_or_else(|| e.to_string()),
                );
            }
        }
    }

    fn session_to_write(&self) -> Option<Session> {
        let mut s = self.session.clone()?;
        s.manifest.setup = self.setup.clone();
        s.manifest.part = self.part.clone();
        for st in &mut s.manifest.stations {
            if let Some(src) = self.data.stations.iter().find(|d| d.station == st.station) {
                st.position_m = src.position_m;
                st.position_source = src.position_source;
            }
            st.label = self.labels.get(&st.station).cloned();
        }
        if let Some(a) = &self.analysis {
            s.manifest.hits = crate::session::saved_hits(a);
        }
        s.manifest.model = self.study.clone();
        s.manifest.fit =
            (self.modal_settings != ModalSettings::default()).then(|| self.modal_settings.clone());
        Some(s)
    }
}

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
    /// The shaft model or its service questions changed: solve again.
    ModelEdited,
    /// Read a shaft model (JSON) into the test.
    LoadModel(PathBuf),
    /// Write the shaft model as JSON.
    WriteModel(PathBuf),
    /// Write the test report (HTML) of what the window shows.
    WriteReport(PathBuf),
    /// A first model: a uniform steel shaft over the stations, free-free.
    NewModel,
}

/// Where a report goes by default: beside a session or WAV set (a session's own folder holds only
/// what the session format defines), or in the working folder for the read-only demo.
fn report_default_path(d: &Document) -> PathBuf {
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
}

struct PathDialog {
    purpose: PathPurpose,
    text: String,
}

/// A line in the message bar.
#[derive(Debug, Clone, PartialEq)]
pub struct Message {
    /// Text.
    pub text: String,
    /// An error (else a notice).
    pub error: bool,
}

/// The application.
pub struct TapgridApp {
    /// Persisted settings.
    pub settings: Settings,
    /// The open test.
    pub doc: Option<Document>,
    /// Station shown.
    pub current_station: Option<u32>,
    /// Hit shown (index within the station).
    pub current_hit: usize,
    /// Mode animated.
    pub selected_mode: usize,
    /// Model mode animated beside it (index into the model's modes, rigid ones included);
    /// `None` follows the pairing of the selected test mode.
    pub selected_model_mode: Option<usize>,
    /// The orders of running speed as typed.
    pub(crate) orders_edit: Option<String>,
    /// The animation runs.
    pub playing: bool,
    /// Animation phase, radians.
    pub phase_rad: f64,
    /// Stations overlaid in the FRF review (besides the current one).
    pub overlay: BTreeSet<u32>,
    /// Station for measured vs synthesized.
    pub synth_station: Option<u32>,
    /// Help panel open.
    pub show_help: bool,
    /// Messages for the person.
    pub messages: Vec<Message>,
    /// Cut hits of one station for the hit view.
    traces: Option<(u32, Arc<Vec<Option<HitTraces>>>)>,
    traces_requested: Option<(u32, u64)>,
    /// Counts analyses received: a new value means new data for the caches.
    pub(crate) analysis_stamp: u64,
    pub(crate) worker: Worker,
    commands: Vec<Command>,
    dialog: Option<PathDialog>,
    last_time: Option<f64>,
    fit_band_edit: Option<[f64; 2]>,
    plot_scratch: plots::Scratch,
    overlays: std::collections::HashMap<&'static str, plots::OverlayCache>,
    /// Live capture state.
    pub capture: capture_view::CaptureState,
    capture_dir: Option<PathBuf>,
    pub(crate) ctx_slot: Arc<OnceLock<egui::Context>>,
}

impl TapgridApp {
    /// A new app that will open `path` (or nothing) once its first frame runs.
    pub fn new(settings: Settings, path: Option<PathBuf>) -> Self {
        let ctx_slot: Arc<OnceLock<egui::Context>> = Arc::new(OnceLock::new());
        let for_worker = ctx_slot.clone();
        let worker = Worker::start(move || {
            if let Some(c) = for_worker.get() {
                c.request_repaint();
            }
        });
        let mut app = Self {
            settings,
            doc: None,
            current_station: None,
            current_hit: 0,
            selected_mode: 0,
            selected_model_mode: None,
            orders_edit: None,
            playing: true,
            phase_rad: 0.0,
            overlay: BTreeSet::new(),
            synth_station: None,
            show_help: false,
            messages: Vec::new(),
            traces: None,
            traces_requested: None,
            analysis_stamp: 0,
            worker,
            commands: Vec::new(),
            dialog: None,
            last_time: None,
            fit_band_edit: None,
            plot_scratch: plots::Scratch::default(),
            overlays: Default::default(),
            capture: Default::default(),
            capture_dir: None,
            ctx_slot,
        };
        if let Some(p) = path {
            app.commands.push(Command::Open(p));
        }
        app
    }

    /// The eframe entry: settings from storage, the demo when no path is given.
    pub fn from_creation(
        cc: &eframe::CreationContext<'_>,
        path: Option<PathBuf>,
        view: Option<View>,
    ) -> Self {
        let mut settings = cc
            .storage
            .and_then(|s| eframe::get_value::<Settings>(s, SETTINGS_KEY))
            .unwrap_or_default();
        if let Some(v) = view {
            settings.view = v;
        }
        Self::new(settings, path)
    }

    /// Queues a command (tests and views).
    pub fn push(&mut self, c: Command) {
        self.commands.push(c);
    }

    /// What the worker is busy with.
    pub fn busy(&self) -> Option<&'static str> {
        self.worker.busy()
    }

    /// How overlaid traces are drawn (the benchmark compares the modes).
    pub fn set_plot_mode(&mut self, mode: plots::PlotMode) {
        self.plot_scratch.mode = mode;
    }

    /// True when nothing is queued: no command waiting and the worker idle.
    pub fn idle(&self) -> bool {
        self.commands.is_empty() && self.worker.busy().is_none()
    }

    /// Non-drawing work of a frame: worker outcomes, animation clock, pending commands.
    pub fn logic(&mut self, ctx: &egui::Context) {
        if self.ctx_slot.get().is_none() {
            let _ = self.ctx_slot.set(ctx.clone());
            style(ctx, self.settings.dark);
        }
        let deadline = std::time::Instant::now() + std::time::Duration::from_millis(4);
        while let Some(o) = self.worker.try_recv() {
            self.receive(o);
            if std::time::Instant::now() > deadline {
                ctx.request_repaint();
                break;
            }
        }
        let now = ctx.input(|i| i.time);
        self.drain_capture(now);
        if let Some(t0) = self.last_time
            && self.playing
            && self.settings.view.animates()
        {
            let dt = (now - t0).clamp(0.0, 0.1);
            self.phase_rad = (self.phase_rad
                + std::f64::consts::TAU * self.settings.speed_hz as f64 * dt)
                % std::f64::consts::TAU;
        }
        self.last_time = Some(now);
        if self.playing && self.settings.view.animates() {
            ctx.request_repaint();
        }
        if self.worker.busy().is_some() {
            ctx.request_repaint_after(std::time::Duration::from_millis(100));
        }
        self.apply_pending(ctx);
    }

    fn apply_pending(&mut self, ctx: &egui::Context) {
        let cmds = std::mem::take(&mut self.commands);
        for c in cmds {
            self.apply(ctx, c);
        }
    }

    /// Draws the whole window into `ui`.
    pub fn show(&mut self, ui: &mut egui::Ui) {
        let ctx = ui.ctx().clone();
        self.shortcuts(&ctx);
        egui::Panel::top("tapgrid-top").show(ui, |ui| self.top_bar(ui));
        egui::Panel::bottom("tapgrid-status").show(ui, |ui| self.status_bar(ui));
        if self.show_help {
            egui::Panel::right("tapgrid-help")
                .default_size(380.0)
                .show(ui, |ui| help::panel(ui, &mut self.commands));
        }
        egui::CentralPanel::default().show(ui, |ui| {
            if self.doc.is_none() && self.settings.view != View::Capture {
                ui.centered_and_justified(|ui| {
                    if let Some(what) = self.worker.busy() {
                        ui.label(egui::RichText::new(format!("{what}…")).size(22.0));
                    } else {
                        ui.label(
                            egui::RichText::new("Open a session or a WAV set (File menu)")
                                .size(22.0),
                        );
                    }
                });
                return;
            }
            match self.settings.view {
                View::Setup => setup_view::show(ui, self),
                View::Stations => station_map::show(ui, self),
                View::Hits => hits_view::show(ui, self),
                View::Frf => frf_view::show(ui, self),
                View::Fit => fit_view::show(ui, self),
                View::Modes => modes_view::show(ui, self),
                View::Capture => capture_view::show(ui, self),
                View::Model => model_view::show(ui, self),
                View::Margins => margin_view::show(ui, self),
            }
        });
        if !self.settings.cautions_read {
            help::first_start(&ctx, &mut self.settings.cautions_read);
        }
        self.path_dialog(&ctx);
        self.apply_pending(&ctx);
    }

    fn top_bar(&mut self, ui: &mut egui::Ui) {
        ui.horizontal_wrapped(|ui| {
            ui.menu_button("File", |ui| {
                if ui.button("Open folder…").clicked() {
                    self.commands.push(Command::AskPath(PathPurpose::Open));
                }
                if ui.button("Replay a WAV set…").clicked() {
                    self.commands.push(Command::AskPath(PathPurpose::Import));
                }
                let can_save = self.doc.as_ref().is_some_and(|d| !d.read_only);
                if ui
                    .add_enabled(can_save, egui::Button::new("Save"))
                    .clicked()
                {
                    self.commands.push(Command::Save);
                }
                if ui
                    .add_enabled(
                        self.doc.is_some(),
                        egui::Button::new("Save as new session…"),
                    )
                    .clicked()
                {
                    self.commands.push(Command::AskPath(PathPurpose::SaveAs));
                }
                let can_report = self.doc.as_ref().is_some_and(|d| d.analysis.is_some());
                if ui
                    .add_enabled(can_report, egui::Button::new("Write report…"))
                    .clicked()
                {
                    self.commands
                        .push(Command::AskPath(PathPurpose::WriteReport));
                }
                ui.separator();
                ui.label("Recent");
                for p in self.settings.recent.clone() {
                    if ui.button(p.display().to_string()).clicked() {
                        self.commands.push(Command::Open(p));
                    }
                }
            });
            let theme = if self.settings.dark {
                "Light theme"
            } else {
                "Dark theme"
            };
            if ui.button(theme).clicked() {
                self.settings.dark = !self.settings.dark;
                style(ui.ctx(), self.settings.dark);
            }
            if ui.button("Help").clicked() {
                self.commands.push(Command::ToggleHelp);
            }
            ui.separator();
            for v in View::ALL {
                let sel = self.settings.view == v;
                if ui
                    .add(egui::Button::selectable(
                        sel,
                        egui::RichText::new(v.label()).size(17.0),
                    ))
                    .clicked()
                {
                    self.commands.push(Command::Show(v));
                }
            }
        });
    }

    fn status_bar(&mut self, ui: &mut egui::Ui) {
        ui.horizontal(|ui| {
            if let Some(what) = self.worker.busy() {
                ui.spinner();
                ui.label(format!("{what}…"));
                ui.separator();
            }
            if let Some(d) = &self.doc {
                let mut title = d.part.name.clone();
                if let Some(who) = &d.locked_by {
                    title.push_str(&format!("  (read-only: in use by {who})"));
                } else if d.read_only {
                    title.push_str("  (demo: read-only, use Save as)");
                } else if d.dirty {
                    title.push_str("  (unsaved changes)");
                }
                ui.label(egui::RichText::new(title).strong());
                ui.label(d.path.display().to_string());
                if let Some(st) = self.current_station {
                    ui.separator();
                    ui.label(format!("station {st}"));
                }
            }
            if let Some(m) = self.messages.last() {
                ui.separator();
                let color = if m.error {
                    plots::BAD
                } else {
                    ui.visuals().text_color()
                };
                ui.label(egui::RichText::new(&m.text).color(color));
                if ui.small_button("dismiss").clicked() {
                    self.messages.pop();
                }
            }
        });
    }

    fn shortcuts(&mut self, ctx: &egui::Context) {
        if ctx.egui_wants_keyboard_input() {
            return;
        }
        use egui::Key;
        let pressed = |k| ctx.input(|i| i.key_pressed(k));
        let cmd = ctx.input(|i| i.modifiers.command);
        if cmd && pressed(Key::S) {
            self.commands.push(Command::Save);
            return;
        }
        if cmd && pressed(Key::O) {
            self.commands.push(Command::AskPath(PathPurpose::Open));
            return;
        }
        for (k, c) in [
            (Key::ArrowRight, Command::NextStation),
            (Key::ArrowLeft, Command::PrevStation),
            (Key::N, Command::NextStation),
            (Key::P, Command::PrevStation),
            (Key::ArrowDown, Command::NextHit),
            (Key::ArrowUp, Command::PrevHit),
            (Key::A, Command::VerdictCurrent(true)),
            (Key::R, Command::VerdictCurrent(false)),
            (Key::Space, Command::TogglePlay),
            (Key::F1, Command::ToggleHelp),
        ] {
            if pressed(k) {
                self.commands.push(c);
            }
        }
        for (k, v) in [
            (Key::Num1, View::Setup),
            (Key::Num2, View::Stations),
            (Key::Num3, View::Hits),
            (Key::Num4, View::Frf),
            (Key::Num5, View::Fit),
            (Key::Num6, View::Modes),
            (Key::Num7, View::Capture),
            (Key::Num8, View::Model),
            (Key::Num9, View::Margins),
        ] {
            if pressed(k) {
                self.commands.push(Command::Show(v));
            }
        }
    }

    fn path_dialog(&mut self, ctx: &egui::Context) {
        let Some(d) = &mut self.dialog else {
            return;
        };
        let title = match d.purpose {
            PathPurpose::Open => "Open a session or WAV set folder",
            PathPurpose::Import => "Replay a WAV set folder",
            PathPurpose::SaveAs => "Save as a new session folder",
            PathPurpose::LoadModel => "Read a shaft model (JSON file)",
            PathPurpose::WriteModel => "Write the shaft model (JSON file)",
            PathPurpose::WriteReport => "Write the test report (HTML file)",
        };
        let mut close = false;
        let mut go = None;
        egui::Window::new(title)
            .collapsible(false)
            .resizable(false)
            .anchor(egui::Align2::CENTER_CENTER, [0.0, 0.0])
            .show(ctx, |ui| {
                ui.label(match d.purpose {
                    PathPurpose::LoadModel | PathPurpose::WriteModel | PathPurpose::WriteReport => {
                        "File:"
                    }
                    _ => "Folder:",
                });
                let r = ui.add(egui::TextEdit::singleline(&mut d.text).desired_width(520.0));
                let enter = r.lost_focus() && ui.input(|i| i.key_pressed(egui::Key::Enter));
                ui.horizontal(|ui| {
                    if ui.button("OK").clicked() || enter {
                        go = Some(PathBuf::from(d.text.trim()));
                    }
                    if ui.button("Cancel").clicked() {
                        close = true;
                    }
                });
            });
        if let Some(p) = go {
            let purpose = d.purpose;
            self.dialog = None;
            if !p.as_os_str().is_empty() {
                self.commands.push(match purpose {
                    PathPurpose::Open | PathPurpose::Import => Command::Open(p),
                    PathPurpose::SaveAs => Command::SaveAs(p),
                    PathPurpose::LoadModel => Command::LoadModel(p),
                    PathPurpose::WriteModel => Command::WriteModel(p),
                    PathPurpose::WriteReport => Command::WriteReport(p),
                });
            }
        } else if close {
            self.dialog = None;
        }
    }

    pub(crate) fn note(&mut self, text: impl Into<String>, error: bool) {
        self.messages.push(Message {
            text: text.into(),
            error,
        });
        if self.messages.len() > 50 {
            self.messages.remove(0);
        }
    }

    pub(crate) fn request_analysis(&mut self) {
        let Some(d) = &mut self.doc else {
            return;
        };
        let generation = self.worker.next_generation();
        self.worker.send(Job::Analyze {
            generation,
            data: d.data.clone(),
            setup: d.setup.clone(),
            modal: d.modal_settings.clone(),
        });
    }

    fn request_fit(&mut self) {
        let Some(d) = &self.doc else {
            return;
        };
        let Some(frfs) = d.frfs.clone() else {
            return;
        };
        let picked = match (
            &d.picked,
            d.modal.as_ref().and_then(|m| m.stabilization.clone()),
        ) {
            (Some(p), Some(stab)) => Some((Arc::new(stab), p.clone())),
            _ => None,
        };
        let generation = self.worker.next_generation();
        let modal = d.modal_settings.clone();
        self.worker.send(Job::Fit {
            generation,
            frfs,
            modal,
            picked,
        });
    }

    /// Solves the model study again (against the latest fit, when there is one).
    pub(crate) fn request_study(&mut self) {
        let Some(d) = &mut self.doc else {
            return;
        };
        let Some(study) = d.study.clone() else {
            d.study_result = None;
            d.study_error = None;
            return;
        };
        let test = d.test_modes();
        let generation = self.worker.next_generation();
        self.worker.send(Job::Study {
            generation,
            study: Box::new(study),
            test,
        });
    }

    fn receive(&mut self, o: Outcome) {
        match o {
            Outcome::Opened {
                path,
                data,
                session,
            } => {
                let read_only = is_bundled_demo(&path);
                let mut doc = Document::new(path.clone(), data, session.map(|s| *s), read_only);
                doc.take_lock();
                if let Some(who) = &doc.locked_by {
                    self.note(
                        format!("opened read-only: the session is in use by {who}"),
                        true,
                    );
                }
                self.current_station = doc.data.stations.first().map(|s| s.station);
                self.current_hit = 0;
                self.selected_mode = 0;
                self.selected_model_mode = None;
                self.orders_edit = None;
                self.overlay.clear();
                self.traces = None;
                self.traces_requested = None;
                self.synth_station = None;
                self.fit_band_edit = None;
                self.doc = Some(doc);
                self.settings.recent.retain(|p| p != &path);
                self.settings.recent.insert(0, path.clone());
                self.settings.recent.truncate(8);
                self.note(format!("opened {}", path.display()), false);
                // The model needs no test: draw it first, correlate once the fit is in.
                self.request_study();
                self.request_analysis();
            }
            Outcome::Analyzed {
                generation,
                analysis,
                frfs,
                indicators,
                modal,
            } => {
                if !self.worker.is_latest_analysis(generation) {
                    return;
                }
                let Some(d) = &mut self.doc else {
                    return;
                };
                d.analysis = Some(analysis);
                d.frfs = frfs;
                d.indicators = indicators;
                d.analysis_error = None;
                d.picked = None;
                match modal {
                    Ok(m) => {
                        d.modal = Some(m);
                        d.modal_error = None;
                    }
                    Err(e) => {
                        d.modal = None;
                        d.modal_error = Some(e);
                    }
                }
                self.analysis_stamp += 1;
                self.autosave();
                self.request_study();
            }
            Outcome::Fitted { generation, modal } => {
                if !self.worker.is_latest_fit(generation) {
                    return;
                }
                self.analysis_stamp += 1;
                let Some(d) = &mut self.doc else {
                    return;
                };
                match modal {
                    Ok(m) => {
                        if d.picked.is_some() {
                            // A person's pole choice outlives this fit: kept as the frequencies of
                            // the chosen poles, which the next analysis and the saved session
                            // choose again (the stable pole column nearest each).
                            d.modal_settings.selection = Selection::Near(
                                m.modes.iter().map(|x| x.measured_frequency_hz).collect(),
                            );
                            d.dirty = true;
                        }
                        d.modal = Some(m);
                        d.modal_error = None;
                    }
                    Err(e) => {
                        d.modal_error = Some(e.clone());
                        self.note(format!("fit failed: {e}"), true);
                    }
                }
                self.autosave();
                self.request_study();
            }
            Outcome::Studied { generation, result } => {
                if !self.worker.is_latest_study(generation) {
                    return;
                }
                let Some(d) = &mut self.doc else {
                    return;
                };
                match result {
                    Ok(r) => {
                        d.study_result = Some(r);
                        d.study_error = None;
                    }
                    Err(e) => d.study_error = Some(e),
                }
                self.autosave();
            }
            Outcome::Traces { station, traces } => {
                self.traces = Some((station, Arc::new(traces)));
            }
            Outcome::Saved(s) => {
                let dir = s.dir.clone();
                if let Some(d) = &mut self.doc {
                    d.data = s.dataset();
                    d.path = dir.clone();
                    d.session = Some(*s);
                    d.read_only = false;
                    d.locked_by = None;
                    d.lock = None;
                    d.dirty = false;
                    d.take_lock();
                }
                self.settings.recent.retain(|p| p != &dir);
                self.settings.recent.insert(0, dir.clone());
                self.note(format!("saved as {}", dir.display()), false);
            }
            Outcome::Devices(d) => self.capture.devices = Some(d),
            Outcome::Skipped => {}
            Outcome::Failed { what, message } => {
                if what == "Analysing"
                    && let Some(d) = &mut self.doc
                {
                    d.analysis_error = Some(message.clone());
                }
                self.note(format!("{what} failed: {message}"), true);
            }
        }
    }

    /// Sessions (not the read-only demo) keep the person's verdicts and setup on disk as soon
    /// as the analysis that reflects them is in.
    fn autosave(&mut self) {
        let Some(d) = &mut self.doc else {
            return;
        };
        if !d.dirty || d.read_only {
            return;
        }
        // While a capture writes this session it is the only writer; the window's edits stay
        // in the document (still marked unsaved) and are written once the capture stops.
        if self.capture.handle.is_some() && self.capture_dir.as_deref() == Some(d.path.as_path()) {
            return;
        }
        if let Some(s) = d.session_to_write() {
            match s.save() {
                Ok(()) => {
                    d.session = Some(s);
                    d.dirty = false;
                }
                Err(e) => self.note(format!("could not save: {e}"), true),
            }
        }
    }

    /// The cut hits of the current station, when loaded for the latest analysis.
    pub fn current_traces(&mut self) -> Option<Arc<Vec<Option<HitTraces>>>> {
        let st = self.current_station?;
        let d = self.doc.as_ref()?;
        let sa = d.station_analysis(st)?;
        if self.traces_requested != Some((st, self.analysis_stamp)) {
            self.traces_requested = Some((st, self.analysis_stamp));
            let job = Job::Traces {
                station: st,
                path: sa.path.clone(),
                // The analysis's setup: it holds the record length chosen for the tapping.
                setup: d
                    .analysis
                    .as_ref()
                    .map_or_else(|| d.setup.clone(), |a| a.setup.clone()),
                hits: sa.result.hits.clone(),
            };
            self.worker.send(job);
        }
        match &self.traces {
            Some((s, t)) if *s == st => Some(t.clone()),
            _ => None,
        }
    }

    fn stations(&self) -> Vec<u32> {
        self.doc
            .as_ref()
            .map(|d| d.data.stations.iter().map(|s| s.station).collect())
            .unwrap_or_default()
    }

    /// Carries out one command.
    pub fn apply(&mut self, ctx: &egui::Context, c: Command) {
        match c {
            Command::Open(p) => self.worker.send(Job::Open(p)),
            Command::Save => self.save(),
            Command::SaveAs(dir) => self.save_as(dir),
            Command::AskPath(purpose) => {
                let text = match purpose {
                    PathPurpose::WriteModel => std::env::current_dir()
                        .unwrap_or_default()
                        .join("shaft.json")
                        .display()
                        .to_string(),
                    PathPurpose::WriteReport => self
                        .doc
                        .as_ref()
                        .map(|d| report_default_path(d).display().to_string())
                        .unwrap_or_default(),
                    PathPurpose::SaveAs => self
                        .doc
                        .as_ref()
                        .map(|d| {
                            let name = d
                                .path
                                .file_name()
                                .map(|n| n.to_string_lossy().into_owned())
                                .unwrap_or_else(|| "session".into());
                            std::env::current_dir()
                                .unwrap_or_default()
                                .join(format!("{name}-session"))
                                .display()
                                .to_string()
                        })
                        .unwrap_or_default(),
                    _ => std::env::current_dir()
                        .unwrap_or_default()
                        .display()
                        .to_string(),
                };
                self.dialog = Some(PathDialog { purpose, text });
            }
            Command::Show(v) => self.settings.view = v,
            Command::GoStation(s) => {
                self.current_station = Some(s);
                self.current_hit = 0;
            }
            Command::NextStation | Command::PrevStation => {
                let st = self.stations();
                if st.is_empty() {
                    return;
                }
                let i = self
                    .current_station
                    .and_then(|c| st.iter().position(|&s| s == c))
                    .unwrap_or(0);
                let j = if c == Command::NextStation {
                    (i + 1).min(st.len() - 1)
                } else {
                    i.saturating_sub(1)
                };
                self.current_station = Some(st[j]);
                self.current_hit = 0;
            }
            Command::NextHit | Command::PrevHit => {
                let n = self
                    .current_station
                    .and_then(|s| self.doc.as_ref()?.station_analysis(s))
                    .map_or(0, |s| s.result.hits.len());
                if n == 0 {
                    return;
                }
                self.current_hit = if c == Command::NextHit {
                    (self.current_hit + 1).min(n - 1)
                } else {
                    self.current_hit.saturating_sub(1)
                };
            }
            Command::SelectHit(h) => self.current_hit = h,
            Command::SetVerdict {
                station,
                hit,
                accept,
            } => self.set_verdict(station, hit, accept),
            Command::VerdictCurrent(accept) => {
                if let Some(st) = self.current_station {
                    self.set_verdict(st, self.current_hit, Some(accept));
                }
            }
            Command::Reanalyse => {
                if let Some(d) = &mut self.doc {
                    d.dirty = true;
                }
                self.request_analysis();
            }
            Command::TogglePole {
                frequency_hz,
                tolerance_hz,
            } => self.toggle_pole(frequency_hz, tolerance_hz),
            Command::AutoPoles => {
                if let Some(d) = &mut self.doc {
                    d.picked = None;
                    d.modal_settings.selection = Selection::Auto;
                    d.dirty = true;
                }
                self.request_fit();
            }
            Command::SetFitBand(b) => {
                if let Some(d) = &mut self.doc {
                    d.modal_settings.band_hz = b;
                    d.modal_settings.selection = Selection::Auto;
                    d.picked = None;
                    d.dirty = true;
                }
                self.request_fit();
            }
            Command::TogglePlay => self.playing = !self.playing,
            Command::ToggleHelp => self.show_help = !self.show_help,
            Command::SelectMode(m) => {
                self.selected_mode = m;
                self.selected_model_mode = None;
            }
            Command::SelectModelMode(m) => self.selected_model_mode = Some(m),
            Command::ModelEdited => {
                if let Some(d) = &mut self.doc {
                    d.dirty = true;
                }
                self.request_study();
            }
            Command::LoadModel(p) => self.load_model(&p),
            Command::WriteModel(p) => self.write_model(&p),
            Command::WriteReport(p) => self.write_report(&p),
            Command::NewModel => {
                if let Some(d) = &mut self.doc {
                    d.study = Some(model_edit::first_model(d));
                    d.dirty = true;
                }
                self.request_study();
            }
        }
        ctx.request_repaint();
    }

    fn set_verdict(&mut self, station: u32, hit: usize, accept: Option<bool>) {
        let Some(d) = &mut self.doc else {
            return;
        };
        let Some(i) = d.station_index(station) else {
            return;
        };
        let known = d
            .station_analysis(station)
            .is_some_and(|s| hit < s.result.hits.len());
        if !known {
            return;
        }
        let ov = &mut d.data.stations[i].overrides;
        match accept {
            Some(v) => {
                ov.insert(hit, v);
            }
            None => {
                ov.remove(&hit);
            }
        }
        d.dirty = true;
        self.request_analysis();
    }

    fn toggle_pole(&mut self, f: f64, tol: f64) {
        let Some(d) = &mut self.doc else {
            return;
        };
        let Some(m) = d.modal.clone() else {
            return;
        };
        let Some(stab) = &m.stabilization else {
            self.note(
                "no stabilization diagram (peak method): nothing to pick",
                true,
            );
            return;
        };
        let mut picked = d
            .picked
            .clone()
            .unwrap_or_else(|| fit_view::poles_of_modes(&m, stab));
        if let Some(k) = picked
            .iter()
            .position(|&p| (stab.poles[p].frequency_hz - f).abs() <= tol)
        {
            picked.remove(k);
        } else if let Some(p) = fit_view::best_pole_near(stab, f, tol) {
            picked.push(p);
        } else {
            self.note(format!("no pole within {tol:.1} Hz of {f:.1} Hz"), true);
            return;
        }
        d.picked = Some(picked);
        self.request_fit();
    }

    fn load_model(&mut self, path: &Path) {
        let Some(d) = &mut self.doc else {
            return;
        };
        match crate::model::run::read_shaft(path) {
            Ok(shaft) => {
                // The service questions stay; only the shaft is replaced.
                match &mut d.study {
                    Some(st) => st.shaft = shaft,
                    None => d.study = Some(Study::new(shaft)),
                }
                d.dirty = true;
                self.note(format!("read the shaft model {}", path.display()), false);
                self.request_study();
            }
            Err(e) => self.note(e.to_string(), true),
        }
    }

    fn write_report(&mut self, path: &Path) {
        let Some(d) = &self.doc else {
            return;
        };
        let Some(analysis) = &d.analysis else {
            self.note(
                "the report needs the analysis, which has not finished",
                true,
            );
            return;
        };
        let empty = ModalResult::default();
        let written = crate::report::document::utc_now();
        let input = crate::report::document::ReportInput {
            part: &d.part.name,
            notes: &d.part.notes,
            source: &d.path,
            analysis,
            modes: d.modal.as_deref().unwrap_or(&empty),
            study: d.study.as_ref().zip(d.study_result.as_deref()),
            written_utc: &written,
        };
        match crate::report::document::write_html(path, &input) {
            Ok(()) => self.note(format!("wrote the report to {}", path.display()), false),
            Err(e) => self.note(e.to_string(), true),
        }
    }

    fn write_model(&mut self, path: &Path) {
        let Some(st) = self.doc.as_ref().and_then(|d| d.study.as_ref()) else {
            return;
        };
        let text = match serde_json::to_string_pretty(&st.shaft) {
            Ok(t) => t,
            Err(e) => {
                self.note(format!("cannot write the model: {e}"), true);
                return;
            }
        };
        match crate::atomic::write_bytes(path, text.as_bytes()) {
            Ok(()) => self.note(format!("wrote {}", path.display()), false),
            Err(e) => self.note(format!("{}: cannot write: {e}", path.display()), true),
        }
    }

    fn save(&mut self) {
        let Some(d) = &mut self.doc else {
            return;
        };
        if d.read_only || d.session.is_none() {
            self.commands.push(Command::AskPath(PathPurpose::SaveAs));
            return;
        }
        if self.capture.handle.is_some() && self.capture_dir.as_deref() == Some(d.path.as_path()) {
            self.note(
                "capture is writing this session: your changes are saved when it stops",
                false,
            );
            return;
        }
        if let Some(s) = d.session_to_write() {
            match s.save() {
                Ok(()) => {
                    d.session = Some(s);
                    d.dirty = false;
                    self.note("saved", false);
                }
                Err(e) => self.note(format!("could not save: {e}"), true),
            }
        }
    }

    fn save_as(&mut self, dir: PathBuf) {
        let Some(d) = &self.doc else {
            return;
        };
        if let Some(s) = d.session_to_write() {
            self.worker.send(Job::SaveAs {
                session: Box::new(s),
                dir,
            });
        } else {
            let hits = d
                .analysis
                .as_ref()
                .map(|a| crate::session::saved_hits(a))
                .unwrap_or_default();
            self.worker.send(Job::CreateSession {
                wavset: d.data.origin.clone(),
                dir,
                setup: d.setup.clone(),
                part: d.part.clone(),
                hits,
                model: d.study.clone().map(Box::new),
            });
        }
    }
}

impl eframe::App for TapgridApp {
    fn logic(&mut self, ctx: &egui::Context, _frame: &mut eframe::Frame) {
        TapgridApp::logic(self, ctx);
    }

    fn ui(&mut self, ui: &mut egui::Ui, _frame: &mut eframe::Frame) {
        self.show(ui);
    }

    fn save(&mut self, storage: &mut dyn eframe::Storage) {
        eframe::set_value(storage, SETTINGS_KEY, &self.settings);
    }
}

/// True for the bundled sample session (opened read-only so the repository copy stays as it is).
fn is_bundled_demo(path: &Path) -> bool {
    let bundled = Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-sessions");
    let canon = |p: &Path| std::fs::canonicalize(p).ok();
    match (canon(path), canon(&bundled)) {
        (Some(p), Some(b)) => p.starts_with(b),
        _ => false,
    }
}

/// Theme and text sizes readable at arm's length.
pub fn style(ctx: &egui::Context, dark: bool) {
    ctx.set_theme(if dark {
        egui::Theme::Dark
    } else {
        egui::Theme::Light
    });
    ctx.all_styles_mut(|s| {
        use egui::{FontFamily, FontId, TextStyle};
        s.text_styles = [
            (
                TextStyle::Heading,
                FontId::new(24.0, FontFamily::Proportional),
            ),
            (TextStyle::Body, FontId::new(16.0, FontFamily::Proportional)),
            (
                TextStyle::Button,
                FontId::new(16.0, FontFamily::Proportional),
            ),
            (
                TextStyle::Monospace,
                FontId::new(15.0, FontFamily::Monospace),
            ),
            (
                TextStyle::Small,
                FontId::new(13.0, FontFamily::Proportional),
            ),
        ]
        .into();
        s.spacing.item_spacing = egui::vec2(10.0, 6.0);
        s.spacing.button_padding = egui::vec2(8.0, 4.0);
    });
}

/// Opens the window: on `path`, else on the demo session (made by the simulator if this
/// installation has none), showing `view` first (else the one shown last).
pub fn run(path: Option<PathBuf>, view: Option<View>) -> anyhow::Result<()> {
    let path = match path {
        Some(p) => p,
        None => crate::sim::demo::demo_session(&crate::sim::demo::default_root())?,
    };
    let options = eframe::NativeOptions {
        viewport: egui::ViewportBuilder::default()
            .with_title("tapgrid — impact modal testing")
            .with_inner_size([1600.0, 1000.0])
            .with_min_inner_size([900.0, 600.0]),
        renderer: eframe::Renderer::Glow,
        ..Default::default()
    };
    eframe::run_native(
        "tapgrid",
        options,
        Box::new(move |cc| Ok(Box::new(TapgridApp::from_creation(cc, Some(path), view)))),
    )
    .map_err(|e| {
        anyhow::anyhow!(
            "cannot open the window: {e} (no display? set DISPLAY, or use the command-line \
             subcommands such as `tapgrid analyze`)"
        )
    })
}

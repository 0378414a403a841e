//! The desktop GUI (eframe + egui_plot). The only layer that knows egui.
//!
//! Shape of the code: [`TapgridApp`] holds a persisted [`Settings`] and runtime state beside it;
//! views draw and push [`Command`]s, which [`TapgridApp::apply`] carries out after the frame; the
//! numeric work runs on the [`worker`] thread and comes back through [`TapgridApp::logic`].

mod capture_thread;
mod capture_view;
mod compare_view;
mod fit_view;
mod frf_view;
mod help;
mod hits_view;
mod margin_view;
mod model_edit;
mod model_view;
mod modes_view;
mod plan_panel;
pub mod plots;
mod rotor_view;
mod run_record;
mod run_view;
mod setup_view;
mod station_map;
pub mod worker;

mod apply;
mod background;
mod chrome;
mod command;
mod document;
mod outcomes;
mod settings;
mod view_ctx;

pub use command::{Command, Message, PathPurpose};
use command::{PathDialog, report_default_path};
pub use document::Document;
pub use run_view::{RecordingState, RunEdit};
pub use settings::{Settings, View};
pub use view_ctx::{SetupEdit, UiState, ViewCtx};

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

/// The physics checks of the fitted test.
pub type ChecksState = background::Background<Vec<crate::pipeline::checks::Check>>;

/// Key under which [`Settings`] persist in eframe's storage.
pub const SETTINGS_KEY: &str = "tapgrid-settings";

/// The application.
pub struct TapgridApp {
    /// Persisted settings.
    pub settings: Settings,
    /// The open test.
    pub doc: Option<Document>,
    /// The window's own state: selections, animation, what is being typed.
    pub ui: UiState,
    /// Messages for the person.
    pub messages: Vec<Message>,
    /// Cut hits of one station for the hit view.
    traces: Option<(u32, Arc<Vec<Option<HitTraces>>>)>,
    traces_requested: Option<(u32, u64)>,
    /// Counts analyses received: a new value means new data for the caches.
    pub(crate) analysis_stamp: u64,
    pub(crate) worker: Worker,
    /// Disk work (saving, reading a session again, writing the report or a model) on a thread
    /// of its own, so neither the window nor a running analysis waits for it.
    pub(crate) io: Worker,
    commands: Vec<Command>,
    dialog: Option<PathDialog>,
    last_time: Option<f64>,
    /// Live capture state.
    pub capture: capture_view::CaptureState,
    capture_dir: Option<PathBuf>,
    /// The rotor-at-speed solve.
    pub(crate) rotor: rotor_view::RotorState,
    /// The run tracking.
    pub(crate) run: run_view::RunState,
    /// A run being recorded from the input.
    pub recording: run_view::RecordingState,
    /// The test plan of the setup view.
    pub(crate) plan: plan_panel::PlanState,
    /// The physics checks of the modes view.
    pub(crate) checks: ChecksState,
    /// The comparison with another test.
    pub(crate) compare: compare_view::CompareState,
    pub(crate) ctx_slot: Arc<OnceLock<egui::Context>>,
}

impl TapgridApp {
    /// A new app that will open `path` (or nothing) once its first frame runs.
    pub fn new(settings: Settings, path: Option<PathBuf>) -> Self {
        let ctx_slot: Arc<OnceLock<egui::Context>> = Arc::new(OnceLock::new());
        let repaint = |slot: Arc<OnceLock<egui::Context>>| {
            move || {
                if let Some(c) = slot.get() {
                    c.request_repaint();
                }
            }
        };
        let worker = Worker::start(repaint(ctx_slot.clone()));
        let io = Worker::start(repaint(ctx_slot.clone()));
        let mut app = Self {
            settings,
            doc: None,
            ui: UiState::default(),
            messages: Vec::new(),
            traces: None,
            traces_requested: None,
            analysis_stamp: 0,
            worker,
            io,
            commands: Vec::new(),
            dialog: None,
            last_time: None,
            capture: Default::default(),
            capture_dir: None,
            rotor: Default::default(),
            run: Default::default(),
            recording: Default::default(),
            plan: Default::default(),
            checks: Default::default(),
            compare: Default::default(),
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

    /// What the workers are busy with (analysis first, then disk work).
    pub fn busy(&self) -> Option<&'static str> {
        self.worker.busy().or_else(|| self.io.busy())
    }

    /// How overlaid traces are drawn (the benchmark compares the modes).
    pub fn set_plot_mode(&mut self, mode: plots::PlotMode) {
        self.ui.plot_scratch.mode = mode;
    }

    /// True when nothing is queued: no command waiting, the workers and the rotor solve idle.
    pub fn idle(&self) -> bool {
        self.commands.is_empty()
            && self.busy().is_none()
            && !self.rotor_busy()
            && !self.run_busy()
            && !self.plan_busy()
            && !self.checks.busy()
            && !self.compare.busy()
    }

    /// Non-drawing work of a frame: worker outcomes, animation clock, pending commands.
    pub fn logic(&mut self, ctx: &egui::Context) {
        if self.ctx_slot.get().is_none() {
            let _ = self.ctx_slot.set(ctx.clone());
            style(ctx, self.settings.dark);
        }
        let deadline = std::time::Instant::now() + std::time::Duration::from_millis(4);
        while let Some(o) = self.io.try_recv().or_else(|| self.worker.try_recv()) {
            self.receive(o);
            if std::time::Instant::now() > deadline {
                ctx.request_repaint();
                break;
            }
        }
        let now = ctx.input(|i| i.time);
        self.drain_capture(now);
        if let Some(t0) = self.last_time
            && self.ui.playing
            && self.settings.view.animates()
        {
            let dt = (now - t0).clamp(0.0, 0.1);
            self.ui.phase_rad = (self.ui.phase_rad
                + std::f64::consts::TAU * self.settings.speed_hz as f64 * dt)
                % std::f64::consts::TAU;
        }
        self.last_time = Some(now);
        if self.ui.playing && self.settings.view.animates() {
            ctx.request_repaint();
        }
        if self.busy().is_some() {
            ctx.request_repaint_after(std::time::Duration::from_millis(100));
        }
        if self.settings.view == View::Hits {
            self.request_traces();
        }
        self.poll_rotor(ctx);
        self.poll_run(ctx);
        self.poll_plan(ctx);
        self.poll_checks(ctx);
        self.poll_compare(ctx);
        self.apply_pending(ctx);
    }

    /// Checks the fitted test's physics when the modes view is shown and the fit changed.
    fn poll_checks(&mut self, ctx: &egui::Context) {
        self.checks.collect(ctx);
        if self.settings.view != View::Modes {
            return;
        }
        let Some(d) = &self.doc else { return };
        let (Some(a), Some(frfs), Some(m)) = (&d.analysis, &d.frfs, &d.modal) else {
            return;
        };
        let shaft = d.study.as_ref().map(|s| s.shaft.clone());
        let key = format!(
            "{}|{:p}|{}",
            self.analysis_stamp,
            Arc::as_ptr(m),
            shaft
                .as_ref()
                .map(|s| serde_json::to_string(s).unwrap_or_default())
                .unwrap_or_default()
        );
        if !self.checks.wants(&key) {
            return;
        }
        let (data, a, frfs, m) = (d.data.clone(), a.clone(), frfs.clone(), m.clone());
        self.checks.start_for(key, "tapgrid-checks", move || {
            Ok(crate::pipeline::checks::physics(
                &data,
                &a,
                &frfs,
                &m,
                shaft.as_ref(),
                None,
            ))
        });
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
        if self.ui.show_help {
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
            let view = self.settings.view;
            let mut cx = self.view_ctx();
            match view {
                View::Setup => setup_view::show(ui, &mut cx),
                View::Stations => station_map::show(ui, &mut cx),
                View::Hits => hits_view::show(ui, &mut cx),
                View::Frf => frf_view::show(ui, &mut cx),
                View::Fit => fit_view::show(ui, &mut cx),
                View::Modes => modes_view::show(ui, &mut cx),
                View::Capture => capture_view::show(ui, &mut cx),
                View::Model => model_view::show(ui, &mut cx),
                View::Margins => margin_view::show(ui, &mut cx),
                View::Rotor => rotor_view::show(ui, &mut cx),
                View::Run => run_view::show(ui, &mut cx),
                View::Compare => compare_view::show(ui, &mut cx),
            }
        });
        if !self.settings.cautions_read {
            help::first_start(&ctx, &mut self.settings.cautions_read);
        }
        self.path_dialog(&ctx);
        self.apply_pending(&ctx);
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

/// Theme, palette and text sizes readable at arm's length. tapgrid's own look: a blue-slate dark
/// theme and a warm-paper light one, cobalt selection, square-ish corners, strong headings.
pub fn style(ctx: &egui::Context, dark: bool) {
    plots::set_dark(dark);
    ctx.set_theme(if dark {
        egui::Theme::Dark
    } else {
        egui::Theme::Light
    });
    let accent = plots::accent();
    ctx.all_styles_mut(|s| {
        use egui::{Color32, CornerRadius, FontFamily, FontId, Stroke, TextStyle};
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
        let v = &mut s.visuals;
        if v.dark_mode {
            v.panel_fill = Color32::from_rgb(24, 28, 34);
            v.window_fill = Color32::from_rgb(30, 35, 42);
            v.extreme_bg_color = Color32::from_rgb(16, 19, 24);
            v.faint_bg_color = Color32::from_rgb(32, 37, 45);
            v.override_text_color = Some(Color32::from_rgb(226, 230, 236));
        } else {
            v.panel_fill = Color32::from_rgb(248, 246, 241);
            v.window_fill = Color32::from_rgb(252, 251, 248);
            v.extreme_bg_color = Color32::from_rgb(255, 255, 253);
            v.faint_bg_color = Color32::from_rgb(238, 235, 228);
            v.override_text_color = Some(Color32::from_rgb(28, 30, 34));
        }
        v.selection.bg_fill = accent.gamma_multiply(if v.dark_mode { 0.55 } else { 0.25 });
        v.selection.stroke = Stroke::new(1.5, accent);
        v.hyperlink_color = accent;
        let r = CornerRadius::same(3);
        v.window_corner_radius = r;
        for w in [
            &mut v.widgets.noninteractive,
            &mut v.widgets.inactive,
            &mut v.widgets.hovered,
            &mut v.widgets.active,
            &mut v.widgets.open,
        ] {
            w.corner_radius = r;
        }
        // Buttons stand out from text: a visible outline at rest.
        v.widgets.inactive.bg_stroke = Stroke::new(1.0, v.widgets.noninteractive.bg_stroke.color);
    });
}

/// Opens the window: on `path`, else on the demo session (made by the simulator if this
/// installation has none), showing `view` first (else the one shown last).
pub fn run(
    path: Option<PathBuf>,
    view: Option<View>,
    run: Option<PathBuf>,
    compare: Option<PathBuf>,
) -> anyhow::Result<()> {
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
        Box::new(move |cc| {
            let mut app = TapgridApp::from_creation(cc, Some(path), view);
            if let Some(r) = run {
                app.push(Command::LoadRun(r));
            }
            if let Some(c) = compare {
                app.push(Command::LoadCompare(c));
            }
            Ok(Box::new(app))
        }),
    )
    .map_err(|e| {
        anyhow::anyhow!(
            "cannot open the window: {e} (no display? set DISPLAY, or use the command-line \
             subcommands such as `tapgrid analyze`)"
        )
    })
}

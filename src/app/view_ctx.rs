//! What a view is given to draw: the open test to read, the window's own state, and a queue for
//! what it asks. A view never changes the document: editors work on a copy and send it back as a
//! command, so every change to the test passes through [`super::TapgridApp::apply`].

use super::*;

/// The window's state that is not the test: what is selected, shown, animated or being typed.
pub struct UiState {
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
    pub orders_edit: Option<String>,
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
    /// Fit band being dragged, Hz.
    pub fit_band_edit: Option<[f64; 2]>,
    /// A setup change waits for a drag to end (or for the setup to be valid) before analysing.
    pub setup_pending: bool,
    /// Station to arm next in the capture form (0: not chosen yet).
    pub capture_station: u32,
    /// Folder for a new session when the open test is not a writable session.
    pub capture_folder: String,
    /// Part name for a new capture session.
    pub capture_part: String,
    /// The rotor view's choices.
    pub rotor: super::rotor_view::RotorEdit,
    /// The run view's choices.
    pub run: super::run_view::RunEdit,
    /// The test plan's choices.
    pub plan: super::plan_panel::PlanEdit,
    /// The other test compared with.
    pub compare: super::compare_view::CompareEdit,
    /// The next report path offered ends in .pdf.
    pub report_pdf: bool,
    pub(super) plot_scratch: plots::Scratch,
    pub(super) overlays: std::collections::HashMap<&'static str, plots::OverlayCache>,
}

impl Default for UiState {
    fn default() -> Self {
        Self {
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
            fit_band_edit: None,
            setup_pending: false,
            capture_station: 0,
            capture_folder: String::new(),
            capture_part: String::new(),
            rotor: Default::default(),
            run: Default::default(),
            plan: Default::default(),
            compare: Default::default(),
            report_pdf: false,
            plot_scratch: plots::Scratch::default(),
            overlays: Default::default(),
        }
    }
}

/// A view's narrow hold on the window for one frame.
pub struct ViewCtx<'a> {
    /// The open test, read only.
    pub doc: Option<&'a Document>,
    /// Preferences that persist between runs (the views' own display choices).
    pub settings: &'a mut Settings,
    /// The window's own state.
    pub ui: &'a mut UiState,
    /// The live capture as last reported, read only.
    pub capture: &'a capture_view::CaptureState,
    /// Cut hits of the current station, when the worker has made them.
    pub traces: Option<Arc<Vec<Option<HitTraces>>>>,
    /// Counts analyses received: caches keyed on it redraw when new data arrive.
    pub analysis_stamp: u64,
    /// The rotor-at-speed solve's last result.
    pub rotor: &'a super::rotor_view::RotorState,
    /// A rotor solve is running.
    pub rotor_running: bool,
    /// The run tracking's last result.
    pub run: &'a super::run_view::RunState,
    /// The run being recorded, as last reported.
    pub recording: &'a super::run_view::RecordingState,
    /// The test plan.
    pub plan: &'a super::plan_panel::PlanState,
    /// The physics checks.
    pub checks: &'a super::ChecksState,
    /// The comparison with another test.
    pub compare: &'a super::compare_view::CompareState,
    commands: &'a mut Vec<Command>,
}

impl<'a> ViewCtx<'a> {
    /// Asks for something; carried out after the frame.
    pub fn push(&mut self, c: Command) {
        self.commands.push(c);
    }
}

impl TapgridApp {
    /// The context handed to the view being drawn.
    pub(super) fn view_ctx(&mut self) -> ViewCtx<'_> {
        let traces = self.ui.current_station.and_then(|st| match &self.traces {
            Some((s, t)) if *s == st => Some(t.clone()),
            _ => None,
        });
        let rotor_running = self.rotor_busy();
        ViewCtx {
            doc: self.doc.as_ref(),
            settings: &mut self.settings,
            ui: &mut self.ui,
            capture: &self.capture,
            traces,
            analysis_stamp: self.analysis_stamp,
            rotor_running,
            rotor: &self.rotor,
            run: &self.run,
            recording: &self.recording,
            plan: &self.plan,
            checks: &self.checks,
            compare: &self.compare,
            commands: &mut self.commands,
        }
    }
}

/// What the setup view sends back: its edited copy of the test's description.
#[derive(Debug, Clone, PartialEq)]
pub struct SetupEdit {
    /// Setup.
    pub setup: Setup,
    /// Part.
    pub part: Part,
    /// Station labels (by station number).
    pub labels: std::collections::BTreeMap<u32, String>,
    /// Station positions along the part, m, in the order of the recordings.
    pub positions_m: Vec<f64>,
    /// Analyse now (else the change waits for a drag to end or the setup to be valid).
    pub analyse: bool,
}

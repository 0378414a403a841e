//! What the window remembers between runs, and its views.

use super::*;

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
    /// The rotor spinning on its bearings: Campbell diagram, stability, unbalance response.
    Rotor,
    /// A run-up or coast-down recording tracked against speed.
    Run,
    /// The open test against another: modes paired, FRFs overlaid.
    Compare,
}

impl View {
    /// All views in tab order.
    pub const ALL: [View; 12] = [
        View::Capture,
        View::Setup,
        View::Stations,
        View::Hits,
        View::Frf,
        View::Fit,
        View::Modes,
        View::Model,
        View::Margins,
        View::Rotor,
        View::Run,
        View::Compare,
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
            View::Rotor => "Rotor at speed",
            View::Run => "Run tracking",
            View::Compare => "Two tests",
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
            "rotor" => View::Rotor,
            "run" => View::Run,
            "compare" => View::Compare,
            _ => return None,
        })
    }

    /// Views that animate mode shapes.
    pub fn animates(self) -> bool {
        matches!(self, View::Modes | View::Model | View::Rotor)
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
    /// Play a short sound on the default output for each kept or rejected hit (off unless the
    /// person turns it on).
    pub sound_cues: bool,
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
            sound_cues: false,
        }
    }
}

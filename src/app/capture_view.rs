//! Live capture: choose the input, arm a station, tap. Each hit shows its verdict in large words
//! once it is saved; levels with peak hold and overload lamps; the station's running FRF and
//! coherence; undo, redo, auto-advance.

use eframe::egui::{self, Color32, RichText, Sense, Stroke, vec2};
use egui_plot::Line;

use super::capture_thread::{self, Control, Report};
use super::plots::{self, accent, bad, good, idle, warn};
use super::{Command, TapgridApp, ViewCtx, station_map};
use crate::acquire::live::DeviceInfo;
use crate::acquire::live::{Cue, play_cue};
use crate::acquire::source::Health;
use crate::capture::{Event, HitEvent};

/// Runtime state of the capture view.
pub struct CaptureState {
    /// Listed inputs.
    pub devices: Option<Result<Vec<DeviceInfo>, String>>,
    /// The running capture.
    pub handle: Option<capture_thread::CaptureHandle>,
    /// Station armed now.
    pub armed: Option<u32>,
    /// Latest peak levels, fraction of full scale.
    pub levels: [f32; 2],
    /// Peak hold (value, time s).
    pub hold: [(f32, f64); 2],
    /// Last overload time, s (−∞: never).
    pub over: [f64; 2],
    /// The last hit saved.
    pub last_hit: Option<HitEvent>,
    /// Trouble counters.
    pub health: Health,
    /// Last message (text, is an error).
    pub message: Option<(String, bool)>,
    /// The sound cue playing, if any (its thread says whether it could be played).
    pub cue: Option<std::thread::JoinHandle<Result<(), crate::acquire::source::SourceError>>>,
}

impl Default for CaptureState {
    fn default() -> Self {
        Self {
            devices: None,
            handle: None,
            armed: None,
            levels: [0.0; 2],
            hold: [(0.0, 0.0); 2],
            // Never overloaded: a lamp lit for the first two seconds of every run was a false alarm.
            over: [f64::NEG_INFINITY; 2],
            last_hit: None,
            health: Health::default(),
            message: None,
            cue: None,
        }
    }
}

impl TapgridApp {
    /// Plays a sound cue when the person asked for them. A cue that cannot be played (no output
    /// device) says so once and turns cues off rather than failing capture.
    fn cue(&mut self, cue: Cue) {
        if !self.settings.sound_cues {
            return;
        }
        if let Some(h) = self.capture.cue.take() {
            if !h.is_finished() {
                // One cue at a time: a second hit within a cue's length goes unsounded.
                self.capture.cue = Some(h);
                return;
            }
            if let Ok(Err(e)) = h.join() {
                self.settings.sound_cues = false;
                self.capture.message = Some((format!("Sound cues turned off: {e}"), true));
                return;
            }
        }
        self.capture.cue = Some(play_cue(cue));
    }

    /// Drains the capture thread's reports (called from `logic`).
    pub(crate) fn drain_capture(&mut self, now: f64) {
        let mut reload = false;
        let mut ended = None;
        let mut incoming = Vec::new();
        if let Some(h) = &self.capture.handle {
            while let Ok(r) = h.reports.try_recv() {
                incoming.push(r);
            }
        }
        for r in incoming {
            match r {
                Report::Event(Event::Levels {
                    peak_a_fs,
                    peak_b_fs,
                }) => {
                    let c = &mut self.capture;
                    c.levels = [peak_a_fs, peak_b_fs];
                    for (k, v) in [peak_a_fs, peak_b_fs].into_iter().enumerate() {
                        if v >= c.hold[k].0 || now - c.hold[k].1 > 2.0 {
                            c.hold[k] = (v, now);
                        }
                        if v >= self
                            .doc
                            .as_ref()
                            .map_or(0.98, |d| d.setup.quality.overload_fraction as f32)
                        {
                            c.over[k] = now;
                        }
                    }
                }
                Report::Event(Event::Armed { station, accepted }) => {
                    // The thread arms stations itself (auto-advance, undo): the form follows.
                    self.capture.armed = Some(station);
                    self.ui.capture_station = station;
                    self.ui.current_station = Some(station);
                    self.capture.message = Some((
                        format!("Tap station {station} ({accepted} kept so far)"),
                        false,
                    ));
                    reload = true;
                }
                Report::Event(Event::Hit(h)) => {
                    self.ui.current_station = Some(h.station);
                    self.capture.message = Some((
                        format!(
                            "Tap station {}: {} of {} kept",
                            h.station, h.accepted_so_far, self.settings.hits_per_station
                        ),
                        false,
                    ));
                    self.cue(if h.accepted { Cue::Kept } else { Cue::Rejected });
                    self.capture.last_hit = Some(*h);
                    reload = true;
                }
                Report::Event(Event::StationDone { station, accepted }) => {
                    self.cue(Cue::StationDone);
                    self.capture.message = Some((
                        format!("Station {station} done: {accepted} hits kept"),
                        false,
                    ));
                }
                Report::Event(Event::Health(hl)) => self.capture.health = hl,
                Report::PlanDone => {
                    let msg = "Every station of the plan has its hits: capture is idle. Stop, or \
                               arm a station to add hits.";
                    self.capture.message = Some((msg.into(), false));
                    self.note(msg, false);
                }
                Report::NothingToUndo => {
                    self.capture.message = Some(("Nothing to undo: no hit saved yet".into(), true));
                }
                Report::Waiting(m) => {
                    self.capture.message = Some((m.clone(), true));
                    self.note(m, true);
                }
                Report::Ended(r) => ended = Some(r),
            }
        }
        if let Some(r) = ended {
            self.capture.handle = None;
            self.capture.armed = None;
            match r {
                Ok(()) => self.capture.message = Some(("Capture stopped".into(), false)),
                Err(e) => {
                    self.capture.message = Some((e.clone(), true));
                    self.note(format!("capture stopped: {e}"), true);
                }
            }
            reload = true;
        }
        if reload {
            self.reload_capture_session();
        }
    }

    /// Reads the capture's session again, off the window's thread; [`Self::reopened`] takes it.
    fn reload_capture_session(&mut self) {
        if let Some(dir) = self.capture_dir.clone() {
            self.io.send(super::worker::Job::Reopen(dir));
        }
    }

    /// A session the capture wrote, read again: recordings and hits as it wrote them, with the
    /// person's changes made meanwhile kept.
    pub(super) fn reopened(&mut self, s: crate::session::Session) {
        let dir = s.dir.clone();
        if self.capture_dir.as_deref() != Some(dir.as_path()) {
            return;
        }
        let same = self.doc.as_ref().is_some_and(|d| d.path == dir);
        let capturing = self.capture.handle.is_some();
        if same {
            if let Some(d) = &mut self.doc {
                // The recordings and hits as the capture wrote them; positions and
                // verdicts the person changed meanwhile are kept (saved once it stops).
                let mut data = s.dataset();
                for st in &mut data.stations {
                    if let Some(old) = d.data.stations.iter().find(|o| o.station == st.station) {
                        st.position_m = old.position_m;
                        st.position_source = old.position_source;
                        for (k, v) in &old.overrides {
                            st.overrides.insert(*k, *v);
                        }
                    }
                }
                d.data = data;
                d.session = Some(s);
                if !capturing {
                    d.take_lock();
                }
            }
        } else {
            let data = s.dataset();
            let mut doc = super::Document::new(dir.clone(), data, Some(s), false);
            if !capturing {
                doc.take_lock();
            }
            self.doc = Some(doc);
        }
        if self
            .doc
            .as_ref()
            .is_some_and(|d| !d.data.stations.is_empty())
        {
            self.request_analysis();
        }
    }
}

fn meter(ui: &mut egui::Ui, label: &str, level: f32, hold: f32, over: bool) {
    ui.horizontal(|ui| {
        ui.label(RichText::new(label).monospace());
        let (r, p) = ui.allocate_painter(vec2(320.0, 22.0), Sense::hover());
        let rect = r.rect;
        p.rect_filled(rect, 3.0, ui.visuals().extreme_bg_color);
        // dBFS scale from −60 to 0.
        let x = |v: f32| {
            let db = 20.0 * v.max(1e-6).log10();
            rect.left() + ((db + 60.0) / 60.0).clamp(0.0, 1.0) * rect.width()
        };
        let color = if level > 0.9 {
            bad()
        } else if level > 0.5 {
            warn()
        } else {
            good()
        };
        p.rect_filled(
            egui::Rect::from_min_max(rect.min, egui::pos2(x(level), rect.bottom())),
            3.0,
            color,
        );
        p.line_segment(
            [
                egui::pos2(x(hold), rect.top()),
                egui::pos2(x(hold), rect.bottom()),
            ],
            Stroke::new(2.0, ui.visuals().text_color()),
        );
        let (lamp, _) = ui.allocate_exact_size(vec2(22.0, 22.0), Sense::hover());
        ui.painter().circle_filled(
            lamp.center(),
            9.0,
            if over {
                bad()
            } else {
                idle().gamma_multiply(0.4)
            },
        );
        ui.label(format!("{:5.1} dBFS", 20.0 * level.max(1e-6).log10()));
        if over {
            ui.label(RichText::new("OVERLOAD").color(bad()).strong());
        }
    });
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let now = ui.input(|i| i.time);
    if app.doc.is_some() {
        station_map::strip(ui, app, 96.0);
    }
    let running = app.capture.handle.is_some();
    egui::Panel::left("capture-controls")
        .default_size(360.0)
        .show(ui, |ui| {
            ui.heading("Live capture");
            ui.label("Input");
            ui.horizontal(|ui| {
                let current = app
                    .settings
                    .capture_device
                    .clone()
                    .unwrap_or_else(|| "generator".into());
                egui::ComboBox::from_id_salt("device")
                    .selected_text(&current)
                    .width(240.0)
                    .show_ui(ui, |ui| {
                        let mut choose = |id: &str, label: &str| {
                            if ui.selectable_label(current == id, label).clicked() {
                                app.settings.capture_device = Some(id.to_string());
                            }
                        };
                        choose("generator", "generator (synthetic, no hardware)");
                        if let Some(Ok(list)) = &app.capture.devices {
                            for d in list.clone() {
                                choose(&d.id, &format!("{} — {}", d.id, d.name));
                            }
                        }
                    });
                if ui
                    .add_enabled(!running, egui::Button::new("Refresh"))
                    .clicked()
                {
                    app.push(Command::ListDevices);
                }
            });
            if let Some(Err(e)) = &app.capture.devices {
                ui.label(RichText::new(e).color(bad()));
            }
            let writable = app
                .doc
                .as_ref()
                .is_some_and(|d| d.session.is_some() && !d.read_only);
            if writable {
                ui.label(format!(
                    "Into this session: {}",
                    app.doc
                        .as_ref()
                        .map(|d| d.path.display().to_string())
                        .unwrap_or_default()
                ));
            } else {
                ui.label("Into a new session folder:");
                if app.ui.capture_folder.is_empty() {
                    let stamp = std::time::SystemTime::now()
                        .duration_since(std::time::UNIX_EPOCH)
                        .map_or(0, |d| d.as_secs());
                    app.ui.capture_folder = crate::sim::demo::default_root()
                        .join("sessions")
                        .join(format!("capture-{stamp}"))
                        .display()
                        .to_string();
                }
                ui.add(egui::TextEdit::singleline(&mut app.ui.capture_folder).desired_width(330.0));
            }
            egui::Grid::new("capture-grid")
                .num_columns(2)
                .show(ui, |ui| {
                    ui.label("sample rate");
                    ui.add_enabled_ui(!running, |ui| {
                        ui.horizontal(|ui| {
                            let mut default = app.settings.capture_rate_hz.is_none();
                            if ui.checkbox(&mut default, "device default").changed() {
                                app.settings.capture_rate_hz =
                                    if default { None } else { Some(51_200) };
                            }
                            if let Some(r) = &mut app.settings.capture_rate_hz {
                                ui.add(
                                    egui::DragValue::new(r).range(8_000..=384_000).suffix(" Hz"),
                                );
                            }
                        });
                    });
                    ui.end_row();
                    ui.label("buffer");
                    ui.add_enabled(
                        !running,
                        egui::DragValue::new(&mut app.settings.capture_buffer_frames)
                            .range(32..=16_384)
                            .suffix(" frames"),
                    );
                    ui.end_row();
                    ui.label("channels");
                    ui.label(app.doc.as_ref().map_or(
                        "A = input 0, B = input 1".to_string(),
                        |d| {
                            format!(
                                "A = input {}, B = input {} (Test setup)",
                                d.setup.channel_a.index, d.setup.channel_b.index
                            )
                        },
                    ));
                    ui.end_row();
                    ui.label("station");
                    if app.ui.capture_station == 0 {
                        let plan = plan_of(&app.settings.station_order, app.doc);
                        app.ui.capture_station = plan.first().copied().unwrap_or(1);
                    }
                    ui.add(egui::DragValue::new(&mut app.ui.capture_station).range(1..=999));
                    ui.end_row();
                    ui.label("hits per station");
                    let a = ui.add(
                        egui::DragValue::new(&mut app.settings.hits_per_station).range(1..=20),
                    );
                    ui.end_row();
                    ui.label("next station");
                    let b = ui.checkbox(&mut app.settings.auto_advance, "arm it automatically");
                    ui.end_row();
                    ui.label("station order");
                    let o = ui.add(
                        egui::TextEdit::singleline(&mut app.settings.station_order)
                            .hint_text("e.g. 1-10, 10-1 or 1,3,5-8")
                            .desired_width(160.0),
                    );
                    ui.end_row();
                    ui.label("sound");
                    ui.checkbox(&mut app.settings.sound_cues, "a short tone for each kept or rejected hit")
                        .on_hover_text("Two rising tones: kept. One low tone: rejected. Three: station done. Played on the default output device.");
                    ui.end_row();
                    let order = capture_thread::parse_order(&app.settings.station_order);
                    if order.is_none() && !app.settings.station_order.trim().is_empty() {
                        ui.label("");
                        ui.label(RichText::new("cannot read the order").color(bad()));
                        ui.end_row();
                    }
                    if (a.changed() || b.changed() || o.changed()) && running {
                        let plan =
                            Control::Plan(app.settings.hits_per_station, app.settings.auto_advance);
                        app.push(Command::CaptureControl(plan));
                        let order = Control::Order(plan_of(&app.settings.station_order, app.doc));
                        app.push(Command::CaptureControl(order));
                    }
                });
            ui.horizontal(|ui| {
                if !running {
                    // A new session needs the part's name first.
                    let named = writable || !app.ui.capture_part.trim().is_empty();
                    if ui
                        .add_enabled(
                            named,
                            egui::Button::new(RichText::new("Start capture").size(20.0)),
                        )
                        .on_disabled_hover_text("Name the part first")
                        .clicked()
                    {
                        app.push(Command::StartCapture);
                    }
                    if !named {
                        ui.label(RichText::new("Name the part to start").color(warn()));
                    }
                } else {
                    if ui.button(RichText::new("Stop").size(20.0)).clicked() {
                        app.push(Command::CaptureControl(Control::Stop));
                    }
                    if ui.button("Arm station").clicked() {
                        let st = app.ui.capture_station;
                        app.push(Command::CaptureControl(Control::Arm(st)));
                    }
                }
            });
            ui.horizontal(|ui| {
                if ui
                    .add_enabled(running, egui::Button::new("Undo last hit"))
                    .clicked()
                {
                    app.push(Command::CaptureControl(Control::Undo));
                }
                if ui
                    .add_enabled(running, egui::Button::new("Redo station"))
                    .clicked()
                {
                    app.push(Command::CaptureControl(Control::Redo));
                }
            });
            let hl = app.capture.health;
            let c = if hl.overrun_frames + hl.stream_errors > 0 {
                bad()
            } else {
                ui.visuals().text_color()
            };
            ui.label(
                RichText::new(format!(
                    "dropped frames {} · stream errors {}",
                    hl.overrun_frames, hl.stream_errors
                ))
                .color(c),
            );
            ui.separator();
            ui.label(
                RichText::new("Before tapping: machine stopped and locked out, eye protection on.")
                    .color(warn()),
            );
        });
    egui::CentralPanel::default().show(ui, |ui| {
        if let Some((m, err)) = &app.capture.message {
            ui.label(
                RichText::new(m)
                    .size(26.0)
                    .color(if *err { bad() } else { accent() }),
            );
        } else if !running {
            ui.label(RichText::new("Not capturing. Choose an input and start.").size(24.0));
        }
        if let Some(h) = &app.capture.last_hit {
            let (word, color) = match (h.accepted, h.by_person) {
                (true, false) => ("KEPT", good()),
                (true, true) => ("KEPT by you", good()),
                (false, false) => ("REJECTED", bad()),
                (false, true) => ("REJECTED by you (undo)", bad()),
            };
            ui.label(
                RichText::new(format!("Station {} hit {}: {word}", h.station, h.index + 1))
                    .size(44.0)
                    .strong()
                    .color(color),
            );
            for r in &h.reasons {
                ui.label(RichText::new(r.sentence()).size(22.0).color(warn()));
            }
            ui.label(format!(
                "{} kept on this station · saved in {} · verdict {:.0} ms after the record ended",
                h.accepted_so_far,
                h.file,
                h.latency_s * 1e3
            ));
        }
        ui.add_space(6.0);
        let c = &app.capture;
        meter(ui, "A", c.levels[0], c.hold[0].0, now - c.over[0] < 2.0);
        meter(ui, "B", c.levels[1], c.hold[1].0, now - c.over[1] < 2.0);
        if let Some(frf) = app.capture.last_hit.as_ref().and_then(|h| h.frf.as_ref()) {
            let h_each = ((ui.available_height() - 20.0) / 2.0).max(100.0);
            let link = egui::Id::unique("capture-frf");
            let mag: Vec<[f64; 2]> = frf
                .freq_hz
                .iter()
                .zip(&frf.h)
                .map(|(f, h)| [*f, plots::db(h.norm())])
                .collect();
            let coh: Vec<[f64; 2]> = frf
                .freq_hz
                .iter()
                .zip(&frf.coherence)
                .map(|(f, g)| [*f, *g])
                .collect();
            plots::plot("capture-mag")
                .height(h_each)
                .link_axis(link, [true, false])
                .y_axis_min_width(56.0)
                .x_axis_label("frequency (Hz)")
                .y_axis_label("running FRF (dB re 1 (m/s²)/N)")
                .show(ui, |p| {
                    p.line(Line::new("running FRF", mag).color(accent()))
                });
            plots::plot("capture-coh")
                .height(h_each)
                .link_axis(link, [true, false])
                .y_axis_min_width(56.0)
                .include_y(0.0)
                .include_y(1.05)
                .x_axis_label("frequency (Hz)")
                .y_axis_label("coherence γ² (0…1)")
                .show(ui, |p| {
                    p.line(Line::new("coherence", coh).color(Color32::from_rgb(120, 200, 120)))
                });
        }
    });
}

/// The stations a capture visits in turn: the order typed, else the open test's stations, else
/// none (then stations follow one another without end).
pub(super) fn plan_of(order_text: &str, doc: Option<&super::Document>) -> Vec<u32> {
    if let Some(o) = capture_thread::parse_order(order_text) {
        return o;
    }
    let mut v: Vec<u32> = doc
        .map(|d| d.data.stations.iter().map(|s| s.station).collect())
        .unwrap_or_default();
    v.sort_unstable();
    v.dedup();
    v
}

impl TapgridApp {
    /// Starts a capture: into the open session when it is writable, else into the folder typed.
    pub(super) fn start_capture(&mut self) {
        if self.recording.active() {
            self.capture.message = Some((
                "a run is being recorded from the input: stop it first (Run tracking)".into(),
                true,
            ));
            return;
        }
        let writable = self
            .doc
            .as_ref()
            .is_some_and(|d| d.session.is_some() && !d.read_only);
        // The capture becomes the session's only writer: the window hands its lock over.
        if writable && let Some(d) = &mut self.doc {
            d.lock = None;
        }
        let (dir, setup, part) = match (&self.doc, writable) {
            (Some(d), true) => (d.path.clone(), d.setup.clone(), d.part.clone()),
            // A new session is a new part: its name is the one asked for, not the open test's.
            (d, _) => (
                std::path::PathBuf::from(self.ui.capture_folder.trim()),
                d.as_ref().map(|d| d.setup.clone()).unwrap_or_default(),
                crate::session::Part {
                    name: self.ui.capture_part.trim().to_string(),
                    notes: String::new(),
                },
            ),
        };
        self.capture_dir = Some(dir.clone());
        let ctx = self.ctx_slot.clone();
        let device = self
            .settings
            .capture_device
            .clone()
            .unwrap_or_else(|| "generator".into());
        self.capture.message = Some((format!("Opening {device}…"), false));
        self.capture.handle = Some(capture_thread::start(
            capture_thread::Start {
                device,
                session: dir,
                setup,
                part,
                station: self.ui.capture_station.max(1),
                hits: self.settings.hits_per_station,
                auto_advance: self.settings.auto_advance,
                order: plan_of(&self.settings.station_order, self.doc.as_ref()),
                rate_hz: self.settings.capture_rate_hz,
                buffer_frames: self.settings.capture_buffer_frames,
            },
            move || {
                if let Some(c) = ctx.get() {
                    c.request_repaint_after(std::time::Duration::from_millis(16));
                }
            },
        ));
    }
}

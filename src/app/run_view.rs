//! A run-up or coast-down recording tracked against speed: each order's amplitude and phase lag
//! (linked speed axes), the polar plot of the 1× vector, the order waterfall, the critical
//! speeds and subsynchronous components found — and the rotor model's predicted critical speeds
//! beside them when the study gives a service rotor. Tracked on a thread of its own.

use std::path::PathBuf;

use eframe::egui::{self, RichText};
use egui_plot::{Line, MarkerShape, Points, VLine};

use super::plots::{self, accent, bad, good, warn};
use super::{Command, PathPurpose, TapgridApp, View, ViewCtx};
use crate::coast::track::Quantity;
use crate::coast::{RunOptions, RunResult, analyse_run};
use crate::pipeline::run_model::RunModel;

/// A run tracked, and the rotor model's view of it when the study has a service rotor.
pub struct RunOutcome {
    /// The tracking.
    pub run: RunResult,
    /// Model critical speeds and the fitted unbalance response (`None`: no service rotor).
    pub model: Option<Result<RunModel, String>>,
    /// Per order, its confident lag stretches (made once here, not every frame).
    pub lags: Vec<(u32, Vec<Vec<[f64; 2]>>)>,
}

/// The last tracking and the one running.
pub type RunState = super::background::Background<RunOutcome>;

/// The view's choices.
#[derive(Debug, Clone, PartialEq)]
pub struct RunEdit {
    /// The recording.
    pub path: Option<PathBuf>,
    /// Sensor sensitivity, mV per m/s² (0: samples taken as m/s²).
    pub sensitivity_mv: f64,
    /// Tach pulses per revolution.
    pub pulses_per_rev: usize,
    /// AC-coupling corner to undo, Hz.
    pub ac_corner_hz: f64,
    /// Amplitudes as velocity (else acceleration).
    pub velocity: bool,
    /// Recording stops by itself once the speed falls below this, rpm (0: only on Stop).
    pub stop_below_rpm: f64,
    /// Folder for runs recorded without a writable session open.
    pub record_folder: String,
}

impl Default for RunEdit {
    fn default() -> Self {
        Self {
            path: None,
            sensitivity_mv: 0.0,
            pulses_per_rev: 1,
            ac_corner_hz: 0.0,
            velocity: false,
            stop_below_rpm: 0.0,
            record_folder: String::new(),
        }
    }
}

/// A run being recorded from the input, as last reported.
#[derive(Default)]
pub struct RecordingState {
    /// The recording thread, while it runs.
    pub(crate) handle: Option<super::run_record::RecordHandle>,
    /// Its last progress.
    pub progress: Option<crate::capture::run::RunProgress>,
    /// Speed against recording time, s and rpm, for the live trace.
    pub speeds: Vec<[f64; 2]>,
    /// What to tell the person (text, is it an error).
    pub message: Option<(String, bool)>,
}

impl RecordingState {
    /// Whether a run is being recorded.
    pub fn active(&self) -> bool {
        self.handle.is_some()
    }
}

impl RunEdit {
    fn options(&self) -> RunOptions {
        RunOptions {
            sensitivity_mv_per_unit: (self.sensitivity_mv > 0.0).then_some(self.sensitivity_mv),
            pulses_per_rev: self.pulses_per_rev.max(1),
            ac_corner_hz: self.ac_corner_hz,
            quantity: if self.velocity {
                Quantity::Velocity
            } else {
                Quantity::Acceleration
            },
            ..RunOptions::default()
        }
    }
}

impl TapgridApp {
    /// Starts tracking when the view is shown and the recording or options changed; takes a
    /// finished result (called from `logic`).
    pub(crate) fn poll_run(&mut self, ctx: &egui::Context) {
        self.drain_recording();
        self.run.collect(ctx);
        if self.settings.view != View::Run {
            return;
        }
        let Some(path) = self.ui.run.path.clone() else {
            return;
        };
        let options = self.ui.run.options();
        // The model part of the key: the study's text (a changed bearing or shaft re-solves).
        let study = self.doc.as_ref().and_then(|d| d.study.clone());
        let model_key = study.as_ref().map_or(0, |s| {
            use std::hash::{Hash, Hasher};
            let mut h = std::collections::hash_map::DefaultHasher::new();
            serde_json::to_string(s).unwrap_or_default().hash(&mut h);
            h.finish()
        });
        let key = format!("{}|{options:?}|{model_key:x}", path.display());
        if !self.run.wants(&key) {
            return;
        }
        self.run.start_for(key, "tapgrid-run", move || {
            let run = analyse_run(&path, &options).map_err(|e| e.to_string())?;
            let model =
                study.and_then(|st| crate::pipeline::run_model::compare_study(&st, &run, None));
            let lags = run
                .tracks
                .iter()
                .map(|(o, pts)| (*o, crate::coast::findings::confident_lags(pts)))
                .collect();
            Ok(RunOutcome { run, model, lags })
        });
    }

    /// Where a new run goes: the open session's `runs/` when it can be written (and no hit
    /// capture is writing it), else the folder typed in the view.
    fn run_folder(&mut self) -> (PathBuf, bool) {
        if let Some(d) = &self.doc
            && d.session.is_some()
            && !d.read_only
        {
            return (d.path.join("runs"), true);
        }
        if self.ui.run.record_folder.trim().is_empty() {
            self.ui.run.record_folder = crate::sim::demo::default_root()
                .join("runs")
                .display()
                .to_string();
        }
        (PathBuf::from(self.ui.run.record_folder.trim()), false)
    }

    pub(super) fn start_run_record(&mut self) {
        if self.recording.active() {
            return;
        }
        if self.capture.handle.is_some() {
            self.recording.message = Some((
                "live hit capture holds the input: stop it first".into(),
                true,
            ));
            return;
        }
        let (folder, _) = self.run_folder();
        let out = crate::capture::run::new_run_path(&folder);
        let device = self
            .settings
            .capture_device
            .clone()
            .unwrap_or_else(|| crate::capture::GENERATOR_ID.into());
        let inputs = self.doc.as_ref().map_or([0, 1], |d| {
            [d.setup.channel_a.index, d.setup.channel_b.index]
        });
        let e = &self.ui.run;
        let start = super::run_record::RecordStart {
            device: device.clone(),
            out,
            inputs,
            rate_hz: self.settings.capture_rate_hz,
            buffer_frames: self.settings.capture_buffer_frames,
            pulses_per_rev: e.pulses_per_rev.max(1),
            auto: crate::capture::run::AutoStop {
                below_rpm: (e.stop_below_rpm > 0.0).then_some(e.stop_below_rpm),
                after_s: None,
            },
        };
        let ctx = self.ctx_slot.clone();
        self.recording.progress = None;
        self.recording.speeds.clear();
        self.recording.message = Some((format!("Opening {device}…"), false));
        self.recording.handle = Some(super::run_record::start(start, move || {
            if let Some(c) = ctx.get() {
                c.request_repaint_after(std::time::Duration::from_millis(50));
            }
        }));
    }

    fn drain_recording(&mut self) {
        use super::run_record::RecordReport;
        let Some(h) = &self.recording.handle else {
            return;
        };
        let mut done = None;
        while let Ok(r) = h.reports.try_recv() {
            match r {
                RecordReport::Progress(p) => {
                    if self.recording.progress.is_none() {
                        self.recording.message = None;
                    }
                    self.recording.progress = Some(p);
                    if let Some(s) = p.speed_rpm {
                        self.recording.speeds.push([p.seconds, s]);
                    }
                }
                RecordReport::Saved(p) => done = Some(Ok(p)),
                RecordReport::Failed(e) => done = Some(Err(e)),
            }
        }
        let Some(done) = done else {
            return;
        };
        self.recording.handle = None;
        match done {
            Ok(p) => {
                let mut text = format!("Saved {}", p.display());
                if let Some(d) = &mut self.doc
                    && !d.read_only
                    && p.starts_with(&d.path)
                    && let Some(s) = &mut d.session
                {
                    let entry =
                        crate::capture::run::saved_run(self.ui.run.pulses_per_rev.max(1), "");
                    match crate::capture::run::session_entry(&d.path, &p, entry) {
                        Ok(mut e) => {
                            e.sensitivity_mv_per_unit = (self.ui.run.sensitivity_mv > 0.0)
                                .then_some(self.ui.run.sensitivity_mv);
                            s.manifest.runs.retain(|r| r.file != e.file);
                            s.manifest.runs.push(e);
                            text.push_str(" and added to the session");
                            if let Some(s) = d.session_to_write() {
                                self.io.send(super::worker::Job::SaveSession {
                                    session: Box::new(s),
                                    announce: false,
                                });
                            }
                        }
                        Err(e) => text = format!("{text}; not added to the session: {e}"),
                    }
                }
                self.recording.message = Some((text, false));
                self.commands.push(Command::LoadRun(p));
            }
            Err(e) => self.recording.message = Some((e, true)),
        }
    }

    /// Whether a tracking is running.
    pub fn run_busy(&self) -> bool {
        self.run.busy()
    }
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let mut cmds = Vec::new();
    let outcome = app.run.result.as_ref().map(|r| r.1.clone());
    let model: Option<Result<RunModel, String>> = outcome
        .as_ref()
        .and_then(|o| o.as_ref().ok())
        .and_then(|o| o.model.clone());
    let result = outcome;
    let fit = model
        .as_ref()
        .and_then(|m| m.as_ref().ok())
        .and_then(|m| m.response.clone());
    let predicted: Vec<f64> = model
        .as_ref()
        .and_then(|m| m.as_ref().ok())
        .map(|m| m.critical_speeds_rpm.clone())
        .unwrap_or_default();
    egui::Panel::left("run-side")
        .default_size(330.0)
        .show(ui, |ui| {
            egui::ScrollArea::vertical().show(ui, |ui| {
                ui.heading("Run-up / coast-down");
                ui.label(
                    "A recording with the tach on input 0 and an accelerometer on input 1, \
                     tracked order by order against speed.",
                );
                if ui.button("Read a run recording…").clicked() {
                    cmds.push(Command::AskPath(PathPurpose::LoadRun));
                }
                if let Some(p) = &app.ui.run.path {
                    ui.label(RichText::new(p.display().to_string()).small());
                }
                session_runs(ui, app, &mut cmds);
                ui.separator();
                record_panel(ui, app, &mut cmds);
                ui.separator();
                let e = &mut app.ui.run;
                egui::Grid::new("run-opts").num_columns(2).show(ui, |ui| {
                    ui.label("sensitivity");
                    ui.add(
                        egui::DragValue::new(&mut e.sensitivity_mv)
                            .range(0.0..=10_000.0)
                            .suffix(" mV/(m/s²)"),
                    )
                    .on_hover_text("0: the samples are taken as m/s² at full scale 1");
                    ui.end_row();
                    ui.label("tach pulses / rev");
                    ui.add(egui::DragValue::new(&mut e.pulses_per_rev).range(1..=360));
                    ui.end_row();
                    ui.label("AC coupling to undo");
                    ui.add(
                        egui::DragValue::new(&mut e.ac_corner_hz)
                            .range(0.0..=50.0)
                            .suffix(" Hz"),
                    );
                    ui.end_row();
                    ui.label("amplitude as");
                    ui.horizontal(|ui| {
                        ui.radio_value(&mut e.velocity, false, "acceleration");
                        ui.radio_value(&mut e.velocity, true, "velocity");
                    });
                    ui.end_row();
                });
                ui.separator();
                match &result {
                    None if app.ui.run.path.is_some() => {
                        ui.label("Tracking…");
                    }
                    None => {}
                    Some(Err(e)) => {
                        ui.label(RichText::new(e).color(bad()));
                    }
                    Some(Ok(o)) => summary(ui, &o.run, &predicted, model.as_ref()),
                }
                ui.separator();
                ui.label(RichText::new(crate::cautions::RUN).color(warn()).small());
            });
        });
    let Some(Ok(o)) = result else {
        for c in cmds {
            app.push(c);
        }
        return;
    };
    let r = &o.run;
    egui::CentralPanel::default().show(ui, |ui| {
        let w = ui.available_width();
        let h = ((ui.available_height() - 60.0) / 2.0).max(160.0);
        let link = egui::Id::unique("run-speed");
        ui.horizontal(|ui| {
            ui.vertical(|ui| {
                ui.set_width(w * 0.62);
                bode(ui, r, &o.lags, &predicted, fit.as_ref(), h, link);
            });
            ui.vertical(|ui| {
                ui.set_width(w * 0.36);
                polar(ui, r, h);
            });
        });
        waterfall(ui, r, h);
    });
    for c in cmds {
        app.push(c);
    }
}

/// The runs a session holds, each one a button that tracks it with its kept settings.
fn session_runs(ui: &mut egui::Ui, app: &mut ViewCtx, cmds: &mut Vec<Command>) {
    let Some(d) = app.doc else {
        return;
    };
    let Some(s) = &d.session else {
        return;
    };
    if s.manifest.runs.is_empty() {
        return;
    }
    ui.label(RichText::new("Runs of this session").strong());
    for r in &s.manifest.runs {
        let path = d.path.join(&r.file);
        let shown = app.ui.run.path.as_ref() == Some(&path);
        let name = std::path::Path::new(&r.file)
            .file_name()
            .map_or(r.file.clone(), |n| n.to_string_lossy().into_owned());
        let label = if r.note.is_empty() {
            format!("{name} ({})", r.recorded)
        } else {
            format!("{name} — {}", r.note)
        };
        if ui.selectable_label(shown, label).clicked() {
            app.ui.run.pulses_per_rev = r.pulses_per_rev;
            app.ui.run.sensitivity_mv = r.sensitivity_mv_per_unit.unwrap_or(0.0);
            cmds.push(Command::LoadRun(path));
        }
    }
}

/// Recording a run from the input: device and stop condition, Record / Stop, the speed and
/// levels as they come.
fn record_panel(ui: &mut egui::Ui, app: &mut ViewCtx, cmds: &mut Vec<Command>) {
    let rec = app.recording;
    let active = rec.active();
    egui::CollapsingHeader::new(RichText::new("Record a run").strong())
        .id_salt("run-record")
        .default_open(true)
        .show(ui, |ui| {
            let device = app
                .settings
                .capture_device
                .clone()
                .unwrap_or_else(|| crate::capture::GENERATOR_ID.into());
            ui.label(format!(
                "Input: {} (chosen in Live capture){}",
                device,
                if device == crate::capture::GENERATOR_ID {
                    " — a synthetic 64 s coast-down"
                } else {
                    ""
                }
            ));
            let session_folder = app
                .doc
                .filter(|d| d.session.is_some() && !d.read_only)
                .map(|d| d.path.join("runs"));
            match &session_folder {
                Some(f) => {
                    ui.label(format!("Into this session: {}", f.display()));
                }
                None => {
                    ui.label("Into the folder:");
                    if app.ui.run.record_folder.is_empty() {
                        app.ui.run.record_folder = crate::sim::demo::default_root()
                            .join("runs")
                            .display()
                            .to_string();
                    }
                    ui.add_enabled(
                        !active,
                        egui::TextEdit::singleline(&mut app.ui.run.record_folder)
                            .desired_width(300.0),
                    );
                }
            }
            ui.horizontal(|ui| {
                let mut auto = app.ui.run.stop_below_rpm > 0.0;
                if ui
                    .add_enabled(!active, egui::Checkbox::new(&mut auto, "stop below"))
                    .on_hover_text(
                        "Stops by itself once the speed, having been above this, falls below it \
                         (or the tach pulses stop): for an unattended coast-down.",
                    )
                    .changed()
                {
                    app.ui.run.stop_below_rpm = if auto { 150.0 } else { 0.0 };
                }
                if auto {
                    ui.add_enabled(
                        !active,
                        egui::DragValue::new(&mut app.ui.run.stop_below_rpm)
                            .range(1.0..=100_000.0)
                            .suffix(" rpm"),
                    );
                }
            });
            ui.horizontal(|ui| {
                if active {
                    if ui.button(RichText::new("Stop and save").strong()).clicked() {
                        cmds.push(Command::StopRecordRun);
                    }
                } else if ui
                    .add_enabled(
                        app.capture.handle.is_none(),
                        egui::Button::new(RichText::new("Record").strong()),
                    )
                    .on_disabled_hover_text("live hit capture holds the input")
                    .clicked()
                {
                    cmds.push(Command::RecordRun);
                }
            });
            if let Some(p) = &rec.progress {
                ui.horizontal(|ui| {
                    ui.label(
                        RichText::new(
                            p.speed_rpm
                                .map_or("— rpm".to_string(), |s| format!("{s:.0} rpm")),
                        )
                        .size(26.0)
                        .strong(),
                    );
                    ui.label(format!(
                        "{:.1} s recorded\n{:.1} s on disk",
                        p.seconds, p.seconds_saved
                    ));
                });
                for (name, v) in [("tach", p.peak_fs[0]), ("vibration", p.peak_fs[1])] {
                    let colour = if v >= 0.99 {
                        bad()
                    } else if v < 0.01 {
                        warn()
                    } else {
                        good()
                    };
                    ui.horizontal(|ui| {
                        ui.label(format!("{name:>9}"));
                        ui.add(
                            egui::ProgressBar::new(v.clamp(0.0, 1.0))
                                .desired_width(170.0)
                                .fill(colour)
                                .text(format!("{:.0} % FS", 100.0 * v)),
                        );
                    });
                }
                if rec.speeds.len() > 1 {
                    egui_plot::Plot::new("run-record-speed")
                        .height(90.0)
                        .allow_drag(false)
                        .allow_zoom(false)
                        .allow_scroll(false)
                        .x_axis_label("s")
                        .y_axis_label("rpm")
                        .show(ui, |pu| {
                            pu.line(Line::new("speed", rec.speeds.clone()).color(accent()));
                        });
                }
            }
            if let Some((m, is_err)) = &rec.message {
                ui.label(RichText::new(m).color(if *is_err { bad() } else { good() }));
            }
        });
}

fn summary(
    ui: &mut egui::Ui,
    r: &RunResult,
    predicted: &[f64],
    model: Option<&Result<RunModel, String>>,
) {
    ui.label(format!(
        "{} revolutions, {:.0}–{:.0} rpm, {}",
        r.revolutions,
        r.speed_range_rpm[0],
        r.speed_range_rpm[1],
        r.direction.word()
    ));
    ui.label(RichText::new("Critical speeds").strong());
    if r.critical_speeds.is_empty() {
        ui.label("none found");
    }
    for c in &r.critical_speeds {
        ui.label(format!(
            "{:.0} rpm ({}×): AF {:.1}{}, lag turns {:.0}°",
            c.speed_rpm,
            c.order,
            c.amplification_factor,
            c.amplification_factor_phase
                .map_or(String::new(), |p| format!(" ({p:.1} by phase)")),
            c.phase_change_deg
        ));
        if let Some(m) = predicted.iter().min_by(|a, b| {
            (*a - c.speed_rpm)
                .abs()
                .total_cmp(&(*b - c.speed_rpm).abs())
        }) {
            ui.label(
                RichText::new(format!(
                    "   model: {m:.0} rpm ({:+.1} %)",
                    100.0 * (m - c.speed_rpm) / c.speed_rpm
                ))
                .color(accent()),
            );
        }
    }
    if !r.subsynchronous.is_empty() {
        ui.label(RichText::new("Subsynchronous").strong());
        for s in &r.subsynchronous {
            ui.label(
                RichText::new(format!(
                    "{:.3}× from {:.0} to {:.0} rpm",
                    s.order, s.from_rpm, s.to_rpm
                ))
                .color(warn()),
            );
        }
    }
    match model {
        Some(Ok(m)) => {
            if let Some(f) = &m.response {
                ui.label(RichText::new("Rotor model").strong());
                ui.label(
                    RichText::new(format!(
                        "Unbalance response at {:.3} m fitted to the 1×: {:.1} % residual \
                         ({:.3}× {}, lag {:+.0}°)",
                        f.position_m, f.residual_pct, f.scale, f.unbalance, f.angle_deg
                    ))
                    .color(accent()),
                );
            }
        }
        Some(Err(e)) => {
            ui.label(RichText::new(format!("rotor model: {e}")).color(bad()));
        }
        None => {}
    }
    for w in &r.warnings {
        ui.label(RichText::new(w).color(warn()).small());
    }
}

fn bode(
    ui: &mut egui::Ui,
    r: &RunResult,
    lags: &[(u32, Vec<Vec<[f64; 2]>>)],
    predicted: &[f64],
    fit: Option<&crate::pipeline::run_model::ResponseFit>,
    h: f32,
    link: egui::Id,
) {
    let unit = r.amplitude_unit;
    let marks = |p: &mut egui_plot::PlotUi<'_>| {
        for c in &r.critical_speeds {
            p.vline(
                VLine::new(format!("critical {:.0} rpm", c.speed_rpm), c.speed_rpm).color(bad()),
            );
        }
        for m in predicted {
            p.vline(
                VLine::new(format!("model {m:.0} rpm"), *m)
                    .color(accent())
                    .style(egui_plot::LineStyle::dashed_loose()),
            );
        }
    };
    plots::plot("run-amp")
        .height(h * 0.55)
        .link_axis(link, [true, false])
        .link_cursor(link, [true, false])
        .y_axis_label(format!("amplitude\n{unit}, 0-pk"))
        .show(ui, |p| {
            for (k, (order, pts)) in r.tracks.iter().enumerate() {
                let mut xy: Vec<[f64; 2]> =
                    pts.iter().map(|q| [q.speed_rpm, q.vector.norm()]).collect();
                xy.sort_by(|a, b| a[0].total_cmp(&b[0]));
                p.line(Line::new(format!("{order}×"), xy).color(plots::trace_color(k)));
            }
            if let Some(f) = fit {
                let xy: Vec<[f64; 2]> = f
                    .speeds_rpm
                    .iter()
                    .zip(&f.predicted_amplitude)
                    .map(|(s, a)| [*s, *a])
                    .collect();
                p.line(
                    Line::new("model, fitted", xy)
                        .color(accent())
                        .style(egui_plot::LineStyle::dashed_dense())
                        .width(2.0),
                );
            }
            marks(p);
        });
    plots::plot("run-phase")
        .height(h * 0.45)
        .link_axis(link, [true, false])
        .link_cursor(link, [true, false])
        .x_axis_label("speed (rpm)")
        .y_axis_label("phase lag\ndegrees")
        .show(ui, |p| {
            // The lag where each order's vector stands clear of its scatter, each confident
            // stretch unwrapped on its own.
            for (k, (order, stretches)) in lags.iter().enumerate() {
                for (n, seg) in stretches.iter().enumerate() {
                    p.line(
                        Line::new(format!("{order}× ({n})"), seg.clone())
                            .color(plots::trace_color(k)),
                    );
                }
            }
            // The measured 1× lags shown, to draw the model's on the same turn of 360°.
            let reference: Vec<[f64; 2]> = lags
                .iter()
                .filter(|(o, _)| *o == 1)
                .flat_map(|(_, s)| s.iter().flatten().copied())
                .collect();
            if let Some(f) = fit {
                let xy: Vec<[f64; 2]> = f
                    .speeds_rpm
                    .iter()
                    .zip(crate::coast::track::unwrap_deg(
                        f.predicted_lag_deg.iter().copied(),
                    ))
                    .map(|(s, l)| [*s, l])
                    .collect();
                // Shift by whole turns to meet the measured lag where the 1× is largest.
                let peak = f
                    .measured_amplitude
                    .iter()
                    .enumerate()
                    .max_by(|a, b| a.1.total_cmp(b.1))
                    .map_or(0, |(i, _)| i);
                let shift = reference
                    .iter()
                    .min_by(|a, b| {
                        (a[0] - f.speeds_rpm[peak])
                            .abs()
                            .total_cmp(&(b[0] - f.speeds_rpm[peak]).abs())
                    })
                    .zip(xy.get(peak))
                    .map_or(0.0, |(m, q)| 360.0 * ((m[1] - q[1]) / 360.0).round());
                let xy: Vec<[f64; 2]> = xy.iter().map(|q| [q[0], q[1] + shift]).collect();
                p.line(
                    Line::new("model, fitted", xy)
                        .color(accent())
                        .style(egui_plot::LineStyle::dashed_dense())
                        .width(2.0),
                );
            }
            marks(p);
        });
    ui.label(
        RichText::new(
            "Red: critical speeds found; blue dashed: the rotor model's critical speeds and its \
             unbalance response fitted to the 1× (one complex factor). Colours by order (first 1×).",
        )
        .small(),
    );
}

fn polar(ui: &mut egui::Ui, r: &RunResult, h: f32) {
    let Some((_, pts)) = r.tracks.iter().find(|t| t.0 == 1) else {
        return;
    };
    ui.label(RichText::new("1× vector (polar)").strong());
    let xy: Vec<[f64; 2]> = pts.iter().map(|q| [q.vector.re, q.vector.im]).collect();
    plots::plot("run-polar")
        .height(h)
        .data_aspect(1.0)
        .x_axis_label("in phase with the tach")
        .y_axis_label("quadrature")
        .show(ui, |p| {
            p.line(Line::new("1×", xy).color(plots::trace_color(0)));
            for c in &r.critical_speeds {
                if let Some(q) = pts.iter().min_by(|a, b| {
                    (a.speed_rpm - c.speed_rpm)
                        .abs()
                        .total_cmp(&(b.speed_rpm - c.speed_rpm).abs())
                }) {
                    p.points(
                        Points::new(
                            format!("{:.0} rpm", c.speed_rpm),
                            vec![[q.vector.re, q.vector.im]],
                        )
                        .shape(MarkerShape::Diamond)
                        .radius(6.0)
                        .color(bad()),
                    );
                }
            }
        });
}

fn waterfall(ui: &mut egui::Ui, r: &RunResult, h: f32) {
    ui.label(
        RichText::new("Order waterfall: amplitude by order and speed (darker: smaller)").strong(),
    );
    let mut all: Vec<f64> = r
        .spectra
        .iter()
        .flat_map(|s| s.amplitude.iter().copied())
        .filter(|v| *v > 0.0)
        .collect();
    if all.is_empty() {
        return;
    }
    all.sort_by(f64::total_cmp);
    // Eight classes over the top 5 % of the lines, spaced logarithmically in amplitude: each
    // class one series of its own shade (the rest is the noise floor, left out).
    let lo = all[(0.95 * (all.len() - 1) as f64) as usize].max(1e-30);
    let hi = all[all.len() - 1].max(lo * 1.0001);
    let edges: Vec<f64> = (0..8)
        .map(|k| lo * (hi / lo).powf(k as f64 / 8.0))
        .collect();
    let mut classes: Vec<Vec<[f64; 2]>> = vec![Vec::new(); 8];
    for s in &r.spectra {
        for (o, a) in s.orders.iter().zip(&s.amplitude) {
            if *o > 4.0 {
                break;
            }
            if let Some(k) = edges.iter().rposition(|e| a >= e) {
                classes[k].push([*o, s.speed_rpm]);
            }
        }
    }
    plots::plot("run-waterfall")
        .height(h - 30.0)
        .x_axis_label("order (× running speed)")
        .y_axis_label("speed (rpm)")
        .show(ui, |p| {
            for (k, pts) in classes.into_iter().enumerate() {
                let c = accent().gamma_multiply(0.25 + 0.75 * k as f32 / 7.0);
                p.points(
                    Points::new(format!("class {k}"), pts)
                        .radius(1.5 + 0.3 * k as f32)
                        .color(c),
                );
            }
            for s in &r.subsynchronous {
                p.vline(VLine::new(format!("{:.3}×", s.order), s.order).color(warn()));
            }
        });
}

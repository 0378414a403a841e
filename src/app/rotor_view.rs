//! The rotor at speed: the shaft model spinning on its bearings in service — Campbell diagram
//! with 1× and 2× lines, critical speeds and the running band; log decrement against speed with
//! the stability threshold; unbalance response or bearing coefficients against speed; whirl
//! orbits along the shaft for a chosen speed and mode. Solved on a thread of its own.

use eframe::egui::{self, Align2, RichText};
use egui_plot::{Axis, Line, LineStyle, MarkerShape, PlotPoint, Points, Span, Text, VLine};

use super::plots::{self, accent, bad, good, idle, warn};
use super::{Command, PathPurpose, TapgridApp, View, ViewCtx};
use crate::rotor::eigen::Whirl;
use crate::rotor::run::{AtSpeed, AtSpeedOptions, at_speed};

/// The last solve and the one running.
pub type RotorState = super::background::Background<AtSpeed>;

/// What the window asks of the rotor, editable in the view.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RotorEdit {
    /// Sweep options (`None`: from the operating range).
    pub options: Option<AtSpeedOptions>,
    /// Speed index of the orbit plot.
    pub speed_ix: usize,
    /// Tracked branch of the orbit plot.
    pub mode: usize,
    /// Lower-left plot shows the bearings' coefficients (else the unbalance response).
    pub show_bearings: bool,
    /// Bearing shown.
    pub bearing: usize,
}

impl Default for RotorEdit {
    fn default() -> Self {
        Self {
            options: None,
            speed_ix: usize::MAX,
            mode: 0,
            show_bearings: false,
            bearing: 0,
        }
    }
}

impl TapgridApp {
    /// Starts a solve when the rotor view is shown and the study or the options changed; takes a
    /// finished solve's result (called from `logic`).
    pub(crate) fn poll_rotor(&mut self, ctx: &egui::Context) {
        self.rotor.collect(ctx);
        if self.settings.view != View::Rotor {
            return;
        }
        let Some(study) = self.doc.as_ref().and_then(|d| d.study.as_ref()) else {
            return;
        };
        // Nothing to solve without bearings; the rotor itself is built on the thread, so a
        // frame costs only the key.
        if study.rotor.is_none() && study.bearings.is_empty() {
            return;
        }
        let chosen = self.ui.rotor.options;
        let key = format!(
            "{}|{chosen:?}",
            serde_json::to_string(study).unwrap_or_default()
        );
        if !self.rotor.wants(&key) {
            return;
        }
        let study = study.clone();
        self.rotor.start_for(key, "tapgrid-rotor", move || {
            let file = crate::rotor::file::from_study(&study)?
                .ok_or("the study gives no bearings in service")?;
            let options =
                chosen.unwrap_or_else(|| AtSpeedOptions::for_range(file.operating_range_rpm));
            at_speed(&file, &options)
        });
    }

    /// Whether a rotor solve is running.
    pub fn rotor_busy(&self) -> bool {
        self.rotor.busy()
    }
}

fn whirl_style(w: Whirl) -> LineStyle {
    match w {
        Whirl::Forward => LineStyle::Solid,
        Whirl::Backward => LineStyle::dashed_loose(),
    }
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let Some(doc) = app.doc else {
        return;
    };
    let Some(study) = &doc.study else {
        ui.vertical_centered(|ui| {
            ui.add_space(80.0);
            ui.label(
                RichText::new("No shaft model yet: make one in the Shaft model view.").size(20.0),
            );
        });
        return;
    };
    let mut cmds = Vec::new();
    let result = app.rotor.result.as_ref().map(|r| r.1.clone());
    let running = app.rotor_running;
    egui::Panel::left("rotor-side")
        .default_size(330.0)
        .show(ui, |ui| {
            egui::ScrollArea::vertical().show(ui, |ui| {
                ui.heading("Rotor at speed");
                match &study.rotor {
                    Some(_) => ui.label(
                        "The tested shaft on the service bearings read from a rotor file \
                         (eight coefficients or plain-bearing geometry), with its unbalances.",
                    ),
                    None if study.bearings.is_empty() => ui.label(
                        RichText::new(
                            "No bearings in service yet: give them in Speed margins, or read a \
                             rotor file with bearings and unbalances.",
                        )
                        .color(warn()),
                    ),
                    None => ui.label(
                        "The tested shaft on the bearings in service (Speed margins) as \
                         undamped isotropic springs. Read a rotor file for damping, \
                         cross-coupling, film bearings and unbalance.",
                    ),
                };
                ui.horizontal(|ui| {
                    if ui.button("Read rotor file…").clicked() {
                        cmds.push(Command::AskPath(PathPurpose::LoadRotor));
                    }
                    if study.rotor.is_some() && ui.button("Use the springs").clicked() {
                        cmds.push(Command::ClearRotor);
                    }
                });
                ui.separator();
                let range = result
                    .as_ref()
                    .and_then(|r| r.as_ref().ok())
                    .and_then(|r| r.operating_range_rpm)
                    .or(study.running_speed_rpm);
                let mut o = app
                    .ui
                    .rotor
                    .options
                    .unwrap_or_else(|| AtSpeedOptions::for_range(range));
                let before = o;
                egui::Grid::new("rotor-opts").num_columns(2).show(ui, |ui| {
                    ui.label("speeds (rpm)");
                    ui.horizontal(|ui| {
                        let [lo, hi] = o.speeds_rpm;
                        ui.add(
                            egui::DragValue::new(&mut o.speeds_rpm[0])
                                .range(0.0..=hi - 1.0)
                                .speed(10.0),
                        );
                        ui.label("to");
                        ui.add(
                            egui::DragValue::new(&mut o.speeds_rpm[1])
                                .range(lo + 1.0..=300_000.0)
                                .speed(10.0),
                        );
                    });
                    ui.end_row();
                    ui.label("steps");
                    ui.add(egui::DragValue::new(&mut o.count).range(5..=400));
                    ui.end_row();
                    ui.label("modes tracked");
                    ui.add(egui::DragValue::new(&mut o.modes).range(2..=24));
                    ui.end_row();
                });
                if o != before {
                    app.ui.rotor.options = Some(o);
                }
                if running {
                    ui.label(RichText::new("Solving…").color(accent()));
                }
                ui.separator();
                match &result {
                    None => {
                        ui.label("Solving…");
                    }
                    Some(Err(e)) => {
                        ui.label(
                            RichText::new(format!("Cannot solve the rotor: {e}")).color(bad()),
                        );
                    }
                    Some(Ok(r)) => summary(ui, r),
                }
                ui.separator();
                ui.label(RichText::new(crate::cautions::ROTOR).color(warn()).small());
            });
        });
    let Some(Ok(r)) = result else {
        for c in cmds {
            app.push(c);
        }
        return;
    };
    egui::CentralPanel::default().show(ui, |ui| {
        let w = ui.available_width();
        let h = ((ui.available_height() - 70.0) / 2.0).max(180.0);
        ui.horizontal(|ui| {
            ui.vertical(|ui| {
                ui.set_width(w / 2.0 - 8.0);
                campbell_plot(ui, &r, h);
            });
            ui.vertical(|ui| {
                ui.set_width(w / 2.0 - 8.0);
                log_dec_plot(ui, &r, h);
            });
        });
        ui.horizontal(|ui| {
            ui.vertical(|ui| {
                ui.set_width(w / 2.0 - 8.0);
                ui.horizontal(|ui| {
                    ui.selectable_value(
                        &mut app.ui.rotor.show_bearings,
                        false,
                        "Unbalance response",
                    );
                    ui.selectable_value(
                        &mut app.ui.rotor.show_bearings,
                        true,
                        "Bearing coefficients",
                    );
                });
                if app.ui.rotor.show_bearings {
                    bearing_plot(ui, &r, &mut app.ui.rotor.bearing, h - 30.0);
                } else {
                    response_plot(ui, &r, h - 30.0);
                }
            });
            ui.vertical(|ui| {
                ui.set_width(w / 2.0 - 8.0);
                orbit_plot(ui, &r, app, h - 30.0);
            });
        });
    });
    for c in cmds {
        app.push(c);
    }
}

fn summary(ui: &mut egui::Ui, r: &AtSpeed) {
    let c = &r.campbell;
    match c.stability_threshold_rpm {
        Some(t) => ui.label(
            RichText::new(format!(
                "Unstable from {t:.0} rpm (whirl at {:.1} Hz)",
                c.threshold_frequency_hz.unwrap_or(f64::NAN)
            ))
            .color(bad())
            .strong(),
        ),
        None => ui.label(
            RichText::new(format!(
                "No instability up to {:.0} rpm",
                r.speeds_rpm.last().copied().unwrap_or(0.0)
            ))
            .color(good()),
        ),
    };
    ui.label(RichText::new("Critical speeds").strong());
    if c.critical_speeds.is_empty() {
        ui.label("none in the range");
    }
    egui::Grid::new("rotor-crit").striped(true).show(ui, |ui| {
        if c.critical_speeds.is_empty() {
            return;
        }
        for h in ["rpm", "order", "whirl", "mode", "log dec"] {
            ui.label(RichText::new(h).small());
        }
        ui.end_row();
        for cs in &c.critical_speeds {
            ui.label(format!("{:.0}", cs.speed_rpm));
            ui.label(format!("{}×", cs.order));
            ui.label(cs.whirl.word());
            ui.label(cs.mode.to_string());
            ui.label(format!("{:.3}", cs.log_dec));
            ui.end_row();
        }
    });
    if !r.peaks.is_empty() {
        ui.label(RichText::new("Unbalance response peaks").strong());
        egui::Grid::new("rotor-peaks").striped(true).show(ui, |ui| {
            for h in ["at (m)", "rpm", "µm 0-pk", "AF", "margin"] {
                ui.label(RichText::new(h).small());
            }
            ui.end_row();
            for p in &r.peaks {
                ui.label(format!("{:.3}", p.peak.position_m));
                ui.label(format!("{:.0}", p.peak.speed_rpm));
                ui.label(format!("{:.2}", p.peak.amplitude_m * 1e6));
                ui.label(
                    p.peak
                        .amplification_factor
                        .map_or("—".into(), |a| format!("{a:.1}")),
                );
                match (p.clear, p.actual_margin_pct, p.required_margin_pct) {
                    (Some(ok), Some(a), Some(q)) => ui.label(
                        RichText::new(format!("{a:.0} % (rule {q:.0} %)")).color(if ok {
                            good()
                        } else {
                            bad()
                        }),
                    ),
                    _ => ui.label("no range given"),
                };
                ui.end_row();
            }
        });
    }
}

/// A text on a plot at (x, y), anchored and coloured (curve labels instead of a legend).
fn label(
    p: &mut egui_plot::PlotUi<'_>,
    at: [f64; 2],
    text: RichText,
    anchor: Align2,
    colour: egui::Color32,
) {
    p.text(
        Text::new("", PlotPoint::new(at[0], at[1]), text)
            .anchor(anchor)
            .color(colour),
    );
}

fn running_band(p: &mut egui_plot::PlotUi<'_>, r: &AtSpeed) {
    if let Some([lo, hi]) = r.operating_range_rpm {
        p.span(
            Span::new("running range", lo..=hi.max(lo + 1.0))
                .axis(Axis::X)
                .fill(good().gamma_multiply(0.18))
                .border_color(good()),
        );
    }
}

fn campbell_plot(ui: &mut egui::Ui, r: &AtSpeed, h: f32) {
    let c = &r.campbell;
    let top_speed = r.speeds_rpm.last().copied().unwrap_or(1.0);
    let f_max = c
        .points
        .iter()
        .map(|p| p.frequency_hz)
        .fold(0.0f64, f64::max);
    ui.label(RichText::new("Campbell diagram: whirl frequencies against speed").strong());
    plots::plot("rotor-campbell")
        .height(h)
        .x_axis_label("speed (rpm)")
        .y_axis_label("whirl frequency (Hz)")
        .include_y(0.0)
        .show(ui, |p| {
            running_band(p, r);
            for (k, order) in [(1.0, "1×"), (2.0, "2×")] {
                let end = (top_speed * k / 60.0).min(f_max * 1.05);
                let end_speed = end * 60.0 / k;
                p.line(
                    Line::new(order, vec![[0.0, 0.0], [end_speed, end]])
                        .color(idle())
                        .width(1.5),
                );
                label(
                    p,
                    [end_speed, end],
                    RichText::new(order).strong(),
                    Align2::RIGHT_BOTTOM,
                    idle(),
                );
            }
            for (b, modes) in c.modes.iter().enumerate() {
                let pts: Vec<[f64; 2]> = r
                    .speeds_rpm
                    .iter()
                    .zip(modes)
                    .map(|(s, m)| [*s, m.frequency_hz])
                    .collect();
                let whirl = c
                    .points
                    .iter()
                    .rev()
                    .find(|q| q.mode == b + 1)
                    .map_or(Whirl::Forward, |q| q.whirl);
                let colour = plots::trace_color(b / 2);
                let name = format!("mode {} ({})", b + 1, whirl.word());
                if let Some(last) = pts.last().copied() {
                    let (tag, anchor) = match whirl {
                        // A forward and backward pair ends close together: one label above its
                        // line end, the other below.
                        Whirl::Forward => ("F", Align2::LEFT_BOTTOM),
                        Whirl::Backward => ("B", Align2::LEFT_TOP),
                    };
                    let text = RichText::new(format!("{}{tag}", b + 1)).strong();
                    label(p, last, text, anchor, colour);
                }
                p.line(
                    Line::new(name, pts)
                        .color(colour)
                        .width(2.0)
                        .style(whirl_style(whirl)),
                );
            }
            let crit: Vec<[f64; 2]> = c
                .critical_speeds
                .iter()
                .map(|cs| [cs.speed_rpm, cs.frequency_hz])
                .collect();
            p.points(
                Points::new("critical speeds", crit)
                    .shape(MarkerShape::Diamond)
                    .radius(6.0)
                    .color(warn()),
            );
            if let Some(t) = c.stability_threshold_rpm {
                p.vline(
                    VLine::new("stability threshold", t)
                        .color(bad())
                        .style(LineStyle::dashed_loose()),
                );
            }
        });
    ui.label(
        RichText::new(
            "Solid: forward whirl; dashed: backward. Diamonds: critical speeds (a mode meets 1× or \
             2×). Green band: running range. Red dashed: stability threshold.",
        )
        .small(),
    );
}

fn log_dec_plot(ui: &mut egui::Ui, r: &AtSpeed, h: f32) {
    let c = &r.campbell;
    ui.label(RichText::new("Logarithmic decrement against speed").strong());
    plots::plot("rotor-logdec")
        .height(h)
        .x_axis_label("speed (rpm)")
        .y_axis_label("log decrement δ")
        .include_y(0.0)
        .include_y(0.2)
        .show(ui, |p| {
            running_band(p, r);
            p.hline(egui_plot::HLine::new("δ = 0: unstable below", 0.0).color(bad()));
            p.hline(
                egui_plot::HLine::new("δ = 0.1", 0.1)
                    .color(warn())
                    .style(LineStyle::dashed_loose()),
            );
            for (b, modes) in c.modes.iter().enumerate() {
                let pts: Vec<[f64; 2]> = r
                    .speeds_rpm
                    .iter()
                    .zip(modes)
                    .map(|(s, m)| [*s, m.log_dec.clamp(-5.0, 5.0)])
                    .collect();
                let whirl = modes.last().map_or(Whirl::Forward, |m| m.whirl);
                p.line(
                    Line::new(format!("mode {}", b + 1), pts)
                        .color(plots::trace_color(b / 2))
                        .width(2.0)
                        .style(whirl_style(whirl)),
                );
            }
            if let Some(t) = c.stability_threshold_rpm {
                p.vline(
                    VLine::new("stability threshold", t)
                        .color(bad())
                        .style(LineStyle::dashed_loose()),
                );
            }
        });
    ui.label(
        RichText::new(
            "Below zero a mode grows by itself. δ = 0.1 is a common stability target (verify \
             against the standard that applies).",
        )
        .small(),
    );
}

fn response_plot(ui: &mut egui::Ui, r: &AtSpeed, h: f32) {
    if r.response.is_empty() {
        ui.label("No unbalance given: read a rotor file with \"unbalances\" to see the response.");
        return;
    }
    plots::plot("rotor-response")
        .height(h)
        .x_axis_label("speed (rpm)")
        .y_axis_label("amplitude along x (µm, 0-pk)")
        .include_y(0.0)
        .show(ui, |p| {
            running_band(p, r);
            for (k, &x) in r.positions_m.iter().enumerate() {
                let pts: Vec<[f64; 2]> = r
                    .response
                    .iter()
                    .filter(|q| q.position_m == x)
                    .map(|q| [q.speed_rpm, q.amplitude_m * 1e6])
                    .collect();
                let colour = plots::trace_color(k);
                if let Some(top) = pts.iter().copied().max_by(|a, b| a[1].total_cmp(&b[1])) {
                    label(
                        p,
                        [top[0], top[1]],
                        RichText::new(format!("at {x:.3} m")).strong(),
                        Align2::RIGHT_BOTTOM,
                        colour,
                    );
                }
                p.line(
                    Line::new(format!("at {x:.3} m"), pts)
                        .color(colour)
                        .width(2.0),
                );
            }
            for pk in &r.peaks {
                if let Some(af) = pk.peak.amplification_factor {
                    label(
                        p,
                        [pk.peak.speed_rpm, pk.peak.amplitude_m * 1e6],
                        RichText::new(format!("AF {af:.1}")),
                        Align2::RIGHT_BOTTOM,
                        warn(),
                    );
                }
            }
        });
}

fn bearing_plot(ui: &mut egui::Ui, r: &AtSpeed, which: &mut usize, h: f32) {
    if r.bearings_m.is_empty() {
        ui.label("No bearings.");
        return;
    }
    *which = (*which).min(r.bearings_m.len() - 1);
    ui.horizontal(|ui| {
        for (i, x) in r.bearings_m.iter().enumerate() {
            ui.selectable_value(which, i, format!("bearing {} at {x:.3} m", i + 1));
        }
    });
    let b = *which;
    plots::plot("rotor-bearing")
        .height(h - 28.0)
        .x_axis_label("speed (rpm)")
        .y_axis_label("stiffness (MN/m)")
        .show(ui, |p| {
            running_band(p, r);
            for (k, (name, i, j)) in [("kxx", 0, 0), ("kxy", 0, 1), ("kyx", 1, 0), ("kyy", 1, 1)]
                .into_iter()
                .enumerate()
            {
                let pts: Vec<[f64; 2]> = r
                    .speeds_rpm
                    .iter()
                    .zip(&r.coefficients)
                    .map(|(s, c)| [*s, c[b].k_n_per_m[i][j] * 1e-6])
                    .collect();
                let colour = plots::trace_color(k);
                if let Some(last) = pts.last().copied() {
                    label(
                        p,
                        [last[0], last[1]],
                        RichText::new(name).strong(),
                        Align2::LEFT_CENTER,
                        colour,
                    );
                }
                p.line(Line::new(name, pts).color(colour).width(2.0));
            }
        });
}

fn orbit_plot(ui: &mut egui::Ui, r: &AtSpeed, app: &mut ViewCtx, h: f32) {
    let c = &r.campbell;
    if c.modes.is_empty() || r.speeds_rpm.is_empty() {
        return;
    }
    let e = &mut app.ui.rotor;
    if e.speed_ix >= r.speeds_rpm.len() {
        // Start at the top of the running range, else mid-sweep.
        e.speed_ix = r
            .operating_range_rpm
            .map(|[_, hi]| r.speeds_rpm.partition_point(|s| *s < hi))
            .unwrap_or(r.speeds_rpm.len() / 2)
            .min(r.speeds_rpm.len() - 1);
    }
    e.mode = e.mode.min(c.modes.len() - 1);
    let m = &c.modes[e.mode][e.speed_ix];
    ui.horizontal(|ui| {
        ui.label("Whirl at");
        ui.add(egui::Slider::new(&mut e.speed_ix, 0..=r.speeds_rpm.len() - 1).show_value(false));
        ui.label(format!("{:.0} rpm", r.speeds_rpm[e.speed_ix]));
        egui::ComboBox::from_id_salt("rotor-orbit-mode")
            .selected_text(format!("mode {}", e.mode + 1))
            .show_ui(ui, |ui| {
                for (b, modes) in c.modes.iter().enumerate() {
                    let mm = &modes[e.speed_ix];
                    ui.selectable_value(
                        &mut e.mode,
                        b,
                        format!(
                            "mode {}: {:.1} Hz {}",
                            b + 1,
                            mm.frequency_hz,
                            mm.whirl.word()
                        ),
                    );
                }
            });
    });
    ui.label(
        RichText::new(format!(
            "{:.2} Hz, {} whirl, log dec {:.3} — orbits seen obliquely along the shaft",
            m.frequency_hz,
            m.whirl.word(),
            m.log_dec
        ))
        .small(),
    );
    // Oblique view: the shaft along the page, x motion up, y motion up-right.
    let nodes = &r.nodes_m;
    let length = nodes.last().copied().unwrap_or(1.0).max(1e-6);
    let big = (0..nodes.len())
        .map(|n| m.shape[4 * n].norm().max(m.shape[4 * n + 1].norm()))
        .fold(0.0f64, f64::max)
        .max(1e-12);
    let scale = 0.12 * length / big;
    let project = |z: f64, u: f64, v: f64| [z + 0.35 * v * scale, (u + 0.25 * v) * scale];
    let phase = app.ui.phase_rad;
    app.ui.playing = true;
    plots::plot("rotor-orbits")
        .height(h - 46.0)
        .data_aspect(1.0)
        .x_axis_label("position along the shaft (m)")
        .y_axis_label("")
        .show_axes([true, false])
        .allow_drag(false)
        .allow_zoom(false)
        .allow_scroll(false)
        .show(ui, |p| {
            let at = |n: usize, ph: f64| {
                let rot = crate::Complex64::from_polar(1.0, ph);
                let u = (m.shape[4 * n] * rot).re;
                let v = (m.shape[4 * n + 1] * rot).re;
                project(nodes[n], u, v)
            };
            p.line(
                Line::new("axis", vec![[0.0, 0.0], [length, 0.0]])
                    .color(idle())
                    .style(LineStyle::dashed_dense()),
            );
            for n in (0..nodes.len()).step_by((nodes.len() / 24).max(1)) {
                let ring: Vec<[f64; 2]> = (0..=48)
                    .map(|k| at(n, std::f64::consts::TAU * k as f64 / 48.0))
                    .collect();
                p.line(Line::new("orbit", ring).color(accent().gamma_multiply(0.6)));
            }
            let line: Vec<[f64; 2]> = (0..nodes.len()).map(|n| at(n, phase)).collect();
            p.line(Line::new("shaft", line).color(accent()).width(3.0));
            let dots: Vec<[f64; 2]> = r
                .bearings_m
                .iter()
                .map(|&x| {
                    let n = nodes
                        .iter()
                        .enumerate()
                        .min_by(|a, b| (a.1 - x).abs().total_cmp(&(b.1 - x).abs()))
                        .map_or(0, |(i, _)| i);
                    at(n, phase)
                })
                .collect();
            p.points(
                Points::new("bearings", dots)
                    .shape(MarkerShape::Square)
                    .radius(5.0)
                    .color(warn()),
            );
        });
}

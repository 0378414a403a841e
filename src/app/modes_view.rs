//! Mode shapes: the table of modes, the selected shape animated along the part, the auto-MAC as a
//! heat map, and measured against synthesized FRF for a chosen station.

use eframe::egui::{self, Align2, RichText};
use egui_plot::{Line, LineStyle, MarkerShape, PlotPoint, Points, Text};

use super::plots::{self, accent, bad, good, idle, warn};
use super::{Command, ViewCtx};
use crate::modal::{DampingSource, Method, Mode};

fn damping_word(s: Option<DampingSource>) -> &'static str {
    match s {
        Some(DampingSource::Pole) => "fitted pole",
        Some(DampingSource::HalfPower) => "half-power",
        Some(DampingSource::CircleFit) => "circle fit",
        Some(DampingSource::ResponseAutospectrum) => "response half-power",
        None => "—",
    }
}

fn method_word(m: Method) -> &'static str {
    match m {
        Method::Lscf => "LSCF + LSFD",
        Method::Peak => "peak pick",
    }
}

/// Zero crossings of the real part of a shape between stations (linear interpolation), m.
pub fn nodes(positions_m: &[f64], values: &[f64]) -> Vec<f64> {
    let mut out = Vec::new();
    for k in 1..positions_m.len().min(values.len()) {
        let (a, b) = (values[k - 1], values[k]);
        if a == 0.0 && k == 1 {
            out.push(positions_m[0]);
        }
        if b == 0.0 {
            out.push(positions_m[k]);
        } else if a * b < 0.0 {
            let t = a / (a - b);
            out.push(positions_m[k - 1] + t * (positions_m[k] - positions_m[k - 1]));
        }
    }
    out
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let Some(doc) = app.doc else {
        return;
    };
    let Some(m) = doc.modal.clone() else {
        ui.label(doc.modal_error.clone().unwrap_or_else(|| "Fitting…".into()));
        return;
    };
    let frfs = doc.frfs.clone();
    let mut cmds = Vec::new();
    if m.modes.is_empty() {
        ui.label("No mode was found in the band. See the pole-picking view.");
        for w in &m.warnings {
            ui.label(RichText::new(w).color(warn()));
        }
        return;
    }
    let sel = app.ui.selected_mode.min(m.modes.len() - 1);
    egui::Panel::left("mode-table")
        .default_size(440.0)
        .show(ui, |ui| {
            egui::ScrollArea::vertical().show(ui, |ui| {
                ui.heading("Modes");
                egui::Grid::new("modes-grid")
                    .striped(true)
                    .num_columns(6)
                    .show(ui, |ui| {
                        for h in ["#", "f (Hz)", "ζ (%)", "damping from", "MPC", "method"] {
                            ui.label(RichText::new(h).strong());
                        }
                        ui.end_row();
                        for (k, md) in m.modes.iter().enumerate() {
                            let r =
                                ui.add(egui::Button::selectable(k == sel, format!("{}", k + 1)));
                            if r.clicked() {
                                cmds.push(Command::SelectMode(k));
                            }
                            ui.label(format!("{:.2}", md.frequency_hz));
                            ui.label(
                                md.damping_ratio
                                    .map_or("—".into(), |z| format!("{:.3}", z * 100.0)),
                            );
                            ui.label(damping_word(md.damping_source));
                            let mpc_color = if md.mpc >= 0.9 { good() } else { warn() };
                            ui.label(RichText::new(format!("{:.3}", md.mpc)).color(mpc_color));
                            ui.label(method_word(md.method))
                                .on_hover_text(md.notes.join("\n"));
                            ui.end_row();
                        }
                    });
                ui.separator();
                ui.horizontal(|ui| {
                    let label = if app.ui.playing { "Pause" } else { "Play" };
                    if ui.button(label).clicked() {
                        cmds.push(Command::TogglePlay);
                    }
                    ui.label("(Space)");
                });
                ui.add(egui::Slider::new(&mut app.settings.amplitude, 0.1..=1.5).text("amplitude"));
                ui.add(
                    egui::Slider::new(&mut app.settings.speed_hz, 0.1..=3.0)
                        .text("cycles per second"),
                );
                for w in &m.warnings {
                    ui.label(RichText::new(w).color(warn()).small());
                }
                ui.separator();
                ui.label(RichText::new("Auto-MAC").strong());
                let labels: Vec<String> = (1..=m.auto_mac.len()).map(|k| k.to_string()).collect();
                if let Some((i, _)) =
                    plots::heat_map(ui, &m.auto_mac, &labels, &labels, (Some(sel), Some(sel)))
                {
                    cmds.push(Command::SelectMode(i));
                }
                ui.label(
                    RichText::new("MAC 0 (dark) … 1 (bright); off-diagonal should be near 0")
                        .small(),
                );
                // Two modes whose shapes look alike at these stations: too few stations to tell
                // them apart (spatial aliasing), or one mode found twice.
                for i in 0..m.auto_mac.len() {
                    for j in i + 1..m.auto_mac.len() {
                        let v = m.auto_mac[i][j];
                        if v > 0.9 {
                            ui.label(
                            RichText::new(format!(
                                "Modes {} and {} have MAC {v:.2}: the stations cannot tell their \
                                 shapes apart (add stations between, or one mode was found twice)",
                                i + 1,
                                j + 1
                            ))
                            .color(warn())
                            .small(),
                        );
                        }
                    }
                }
                ui.separator();
                physics_checks(ui, app.checks);
            });
        });
    let md = &m.modes[sel];
    egui::CentralPanel::default().show(ui, |ui| {
        let h_shape = (ui.available_height() * 0.55).max(200.0);
        shape_plot(ui, app, md, &m.positions_m, &m.stations, sel, h_shape);
        // Measured against synthesized
        let Some(frfs) = frfs else {
            return;
        };
        let stations = &m.stations;
        let st = app
            .ui
            .synth_station
            .or(app.ui.current_station)
            .filter(|s| stations.contains(s))
            .unwrap_or(stations[0]);
        ui.horizontal(|ui| {
            ui.label(RichText::new("Measured vs synthesized").strong());
            egui::ComboBox::from_id_salt("synth-station")
                .selected_text(format!("station {st}"))
                .show_ui(ui, |ui| {
                    for &s in stations {
                        if ui
                            .selectable_label(s == st, format!("station {s}"))
                            .clicked()
                        {
                            app.ui.synth_station = Some(s);
                        }
                    }
                });
            ui.checkbox(&mut app.settings.overlay_all, "all stations measured");
        });
        let columns = ui.available_width() as usize;
        let id = egui::Id::unique("synth-plot");
        let bounds = plots::last_bounds(ui.ctx(), id);
        let axis = plots::FreqAxis {
            log: app.settings.log_frequency,
        };
        let i_set = frfs.stations.iter().position(|&s| s == st);
        let i_m = stations.iter().position(|&s| s == st);
        let mut traces: Vec<(usize, String, egui::Color32)> = Vec::new();
        if app.settings.overlay_all {
            for n in 0..frfs.h.len() {
                if Some(n) != i_set {
                    let c = plots::trace_color(n).gamma_multiply(0.5);
                    traces.push((n, format!("station {}", frfs.stations[n]), c));
                }
            }
        }
        if let Some(i) = i_set {
            traces.push((i, format!("measured, station {st}"), accent()));
        }
        let syn_pts = i_m
            .and_then(|i| m.synthesized.get(i))
            .filter(|s| !s.is_empty())
            .map(|syn| {
                let f = &m.indicators.freq_hz;
                app.ui
                    .plot_scratch
                    .reduced(f, |k| plots::db(syn[k].norm()), axis, bounds, columns)
            });
        let unit = match frfs.layout {
            crate::setup::Layout::Hammer => "accelerance (dB re 1 (m/s²)/N)",
            crate::setup::Layout::Sensor => "transmissibility (dB re 1)",
        };
        let plot = axis
            .configure(plots::plot(id))
            .height(ui.available_height().max(120.0))
            .y_axis_label(unit)
            .y_axis_min_width(56.0)
            // Bottom left: low levels below the first resonance, away from the peaks.
            .legend(egui_plot::Legend::default().position(egui_plot::Corner::LeftBottom));
        let h = &frfs.h;
        let mag = |i: usize, k: usize| plots::db(h[i][k].norm());
        let shown: Vec<usize> = traces.iter().map(|t| t.0).collect();
        let stamp = plots::stamp((
            app.analysis_stamp,
            std::sync::Arc::as_ptr(&frfs) as usize,
            shown,
            axis.log,
        ));
        let cache = app.ui.overlays.entry("synth-plot").or_default();
        plots::overlaid(
            ui,
            plot,
            id,
            &mut app.ui.plot_scratch,
            cache,
            stamp,
            &frfs.freq_hz,
            axis,
            &traces,
            i_set,
            &mag,
            |p| {
                if let Some(pts) = syn_pts {
                    p.line(
                        Line::new(format!("synthesized, station {st}"), pts)
                            .color(bad())
                            .style(LineStyle::dashed_dense()),
                    );
                }
            },
        );
    });
    for c in cmds {
        app.push(c);
    }
}

fn shape_plot(
    ui: &mut egui::Ui,
    app: &ViewCtx,
    md: &Mode,
    positions: &[f64],
    stations: &[u32],
    sel: usize,
    height: f32,
) {
    let amp = app.settings.amplitude as f64;
    let th = app.ui.phase_rad;
    let (c, s) = (th.cos(), th.sin());
    // Re(φ e^{iθ}): a real mode stands, a complex one travels.
    let y: Vec<f64> = md
        .shape
        .iter()
        .map(|p| amp * (p.re * c - p.im * s))
        .collect();
    let real: Vec<f64> = md.shape.iter().map(|p| p.re).collect();
    let x0 = positions.first().copied().unwrap_or(0.0).min(0.0);
    let x1 = positions.last().copied().unwrap_or(1.0);
    let deformed: Vec<[f64; 2]> = positions.iter().zip(&y).map(|(x, v)| [*x, *v]).collect();
    let envelope_hi: Vec<[f64; 2]> = positions
        .iter()
        .zip(&md.shape)
        .map(|(x, p)| [*x, amp * p.norm()])
        .collect();
    let envelope_lo: Vec<[f64; 2]> = envelope_hi.iter().map(|p| [p[0], -p[1]]).collect();
    let node_x = nodes(positions, &real);
    let complex = md.mpc < 0.95;
    ui.label(
        RichText::new(format!(
            "Mode {} — {:.2} Hz, ζ = {}, MPC {:.3}{}",
            sel + 1,
            md.frequency_hz,
            md.damping_ratio
                .map_or("—".into(), |z| format!("{:.3} %", z * 100.0)),
            md.mpc,
            if complex {
                " (complex: stations move out of phase)"
            } else {
                ""
            }
        ))
        .size(18.0),
    );
    let limit = 1.25 * amp.max(0.2);
    let text_color = ui.visuals().text_color();
    plots::plot("mode-shape")
        .height(height)
        .allow_drag(false)
        .allow_zoom(false)
        .allow_scroll(false)
        .include_y(-limit)
        .include_y(limit)
        .include_x(x0)
        .include_x(x1)
        .x_axis_label("position along the part (m)")
        .y_axis_label("shape (largest = 1, reference +)")
        .show(ui, |p| {
            p.line(
                Line::new("undeformed", vec![[x0, 0.0], [x1, 0.0]])
                    .color(idle())
                    .width(6.0),
            );
            p.line(
                Line::new("envelope", envelope_hi)
                    .color(idle())
                    .style(LineStyle::dotted_dense()),
            );
            p.line(
                Line::new("envelope", envelope_lo)
                    .color(idle())
                    .style(LineStyle::dotted_dense()),
            );
            p.line(
                Line::new("deformed", deformed.clone())
                    .color(accent())
                    .width(3.0),
            );
            p.points(
                Points::new("stations", deformed.clone())
                    .radius(5.0)
                    .color(accent())
                    .filled(true),
            );
            p.points(
                Points::new(
                    "nodes",
                    node_x.iter().map(|x| [*x, 0.0]).collect::<Vec<_>>(),
                )
                .shape(MarkerShape::Cross)
                .radius(9.0)
                .color(bad()),
            );
            for ((st, pt), ph) in stations.iter().zip(&deformed).zip(&md.shape) {
                let mut label = format!("{st}: {:+.2}", ph.re);
                if complex {
                    label.push_str(&format!(" ∠{:.0}°", ph.arg().to_degrees()));
                }
                p.text(
                    Text::new("value", PlotPoint::new(pt[0], limit * 0.92), label)
                        .color(text_color)
                        .anchor(Align2::CENTER_TOP),
                );
            }
        });
}

/// The data's physics checks (driving point, mass line, linearity, grid), made on a thread of
/// their own after each fit.
fn physics_checks(ui: &mut egui::Ui, checks: &super::ChecksState) {
    egui::CollapsingHeader::new(RichText::new("Physics checks").strong())
        .id_salt("physics-checks")
        .default_open(true)
        .show(ui, |ui| match checks.result.as_ref().map(|r| &r.1) {
            None => {
                ui.label("Checking…");
            }
            Some(Err(e)) => {
                ui.label(RichText::new(e).color(super::plots::bad()));
            }
            Some(Ok(list)) => {
                for c in list.iter() {
                    let (tag, colour) = match c.passed {
                        Some(true) => ("ok", good()),
                        Some(false) => ("check", super::plots::bad()),
                        None => ("—", ui.visuals().weak_text_color()),
                    };
                    ui.horizontal_wrapped(|ui| {
                        ui.label(RichText::new(tag).color(colour).strong());
                        ui.label(RichText::new(&c.words).small());
                    });
                }
                ui.label(
                    RichText::new(
                        "Reciprocity needs a second test: tapgrid check SESSION --second OTHER.",
                    )
                    .small(),
                );
            }
        });
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Nodes are where the straight line between two stations of opposite sign crosses zero
    /// (linear interpolation, by definition).
    #[test]
    fn nodes_by_interpolation() {
        let x = [0.0, 1.0, 2.0, 3.0];
        let v = [1.0, -1.0, -1.0, 3.0];
        let n = nodes(&x, &v);
        assert_eq!(n.len(), 2);
        assert!((n[0] - 0.5).abs() < 1e-12);
        assert!((n[1] - 2.25).abs() < 1e-12);
    }
}

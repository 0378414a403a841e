//! Hit check: the current station's hits, both channels with the pretrigger and the windows, the
//! verdict in words, the person's override and the force spectrum against the roll-off limit.

use eframe::egui::{self, RichText};
use egui_plot::{HLine, Line, LineStyle, VLine};

use super::plots::{self, accent, bad, good, warn};
use super::{Command, ViewCtx, station_map};
use crate::setup::Layout;

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    station_map::strip(ui, app, 96.0);
    let Some(st) = app.ui.current_station else {
        ui.label("Choose a station.");
        return;
    };
    let traces = app.traces.clone();
    let Some(doc) = app.doc else {
        return;
    };
    let Some(sa) = doc.station_analysis(st) else {
        ui.label(format!("Station {st} has no analysis yet."));
        return;
    };
    let hits = sa.result.hits.clone();
    let layout = doc.setup.layout;
    let qa = layout.channel_a_quantity();
    let rolloff = doc.setup.quality.rolloff_db;
    let band = doc.setup.band_hz;
    let hi = app.ui.current_hit.min(hits.len().saturating_sub(1));
    let mut cmds = Vec::new();

    egui::Panel::left("hit-list")
        .default_size(330.0)
        .show(ui, |ui| {
            ui.heading(format!("Station {st}"));
            ui.label(format!(
                "{} hits; Up/Down keys step, A/R accept/reject",
                hits.len()
            ));
            for h in &hits {
                let (word, color) = if h.accepted {
                    ("kept", good())
                } else {
                    ("rejected", bad())
                };
                let by = if h.override_accept.is_some() {
                    " (by you)"
                } else {
                    ""
                };
                let text = RichText::new(format!(
                    "Hit {} at {:.2} s — {word}{by}",
                    h.index + 1,
                    h.time_s
                ))
                .color(color);
                if ui
                    .add(egui::Button::selectable(h.index == hi, text))
                    .clicked()
                {
                    cmds.push(Command::SelectHit(h.index));
                }
            }
            ui.separator();
            if let Some(h) = hits.get(hi) {
                let (big, color) = match (h.accepted, h.override_accept) {
                    (true, Some(true)) => ("KEPT by you", good()),
                    (true, _) => ("KEPT", good()),
                    (false, Some(false)) => ("REJECTED by you", bad()),
                    (false, _) => ("REJECTED", bad()),
                };
                ui.label(RichText::new(big).size(34.0).strong().color(color));
                if h.reasons.is_empty() {
                    ui.label("No problem found.");
                }
                for r in &h.reasons {
                    ui.label(RichText::new(r.sentence()).size(17.0).color(warn()));
                    if *r == crate::signal::Reason::Overload {
                        // Which channel: the one at full scale, else the one clipped flat.
                        let limit = doc.setup.quality.overload_fraction;
                        let which: Vec<String> = [("A", h.peak_a_fs), ("B", h.peak_b_fs)]
                            .iter()
                            .filter(|(_, p)| *p >= limit)
                            .map(|(c, p)| {
                                format!("channel {c} peaked at {:.1} % of full scale", p * 100.0)
                            })
                            .collect();
                        let text = if which.is_empty() {
                            format!(
                                "Clipped flat below full scale (A {:.1} %, B {:.1} %): a converter \
                                 or conditioner limit.",
                                h.peak_a_fs * 100.0,
                                h.peak_b_fs * 100.0
                            )
                        } else {
                            format!("{}.", which.join("; "))
                        };
                        ui.label(RichText::new(text).color(warn()));
                    }
                }
                match h.override_accept {
                    Some(true) => ui.label("You accepted this hit."),
                    Some(false) => ui.label("You rejected this hit."),
                    None => ui.label("Verdict is automatic."),
                };
                ui.horizontal(|ui| {
                    if ui.button("Accept hit").clicked() {
                        cmds.push(Command::SetVerdict {
                            station: st,
                            hit: h.index,
                            accept: Some(true),
                        });
                    }
                    if ui.button("Reject hit").clicked() {
                        cmds.push(Command::SetVerdict {
                            station: st,
                            hit: h.index,
                            accept: Some(false),
                        });
                    }
                    if ui
                        .add_enabled(h.override_accept.is_some(), egui::Button::new("Automatic"))
                        .clicked()
                    {
                        cmds.push(Command::SetVerdict {
                            station: st,
                            hit: h.index,
                            accept: None,
                        });
                    }
                });
                ui.separator();
                egui::Grid::new("hit-figures").show(ui, |ui| {
                    ui.label("peak A");
                    ui.label(format!("{:.0} % of full scale", h.peak_a_fs * 100.0));
                    ui.end_row();
                    ui.label("peak B");
                    ui.label(format!("{:.0} % of full scale", h.peak_b_fs * 100.0));
                    ui.end_row();
                    if let Some(w) = h.pulse_width_s {
                        ui.label("pulse width");
                        ui.label(format!("{:.2} ms", w * 1e3));
                        ui.end_row();
                    }
                    if let Some(d) = h.force_drop_db {
                        ui.label("force drop in band");
                        ui.label(format!("{d:.1} dB (limit {rolloff:.0} dB)"));
                        ui.end_row();
                    }
                    if let Some(r) = h.residual_fraction {
                        ui.label("misfit to other hits");
                        ui.label(format!("{:.1} %", r * 100.0));
                        ui.end_row();
                    }
                    if h.ringing_removed {
                        ui.label("carried-over ringing");
                        ui.label("removed");
                        ui.end_row();
                    }
                });
            }
        });

    egui::CentralPanel::default().show(ui, |ui| {
        let Some(traces) = traces else {
            ui.spinner();
            ui.label("Loading the recording…");
            return;
        };
        let Some(Some(t)) = traces.get(hi) else {
            ui.label(
                "This hit's record does not fit in the recording (too near its start or end).",
            );
            return;
        };
        let h_each = ((ui.available_height() - 24.0) / 3.0).max(120.0);
        let columns = ui.available_width() as usize;
        let link = egui::Id::unique("hit-time");
        let a_label = match layout {
            Layout::Hammer => format!("force ({})", qa.si_unit()),
            Layout::Sensor => format!("reference ({})", qa.si_unit()),
        };
        // The force pulse lasts a fraction of a millisecond: its plot opens on the force window.
        let zoom = (layout == Layout::Hammer)
            .then(|| {
                let first = t.window_a.iter().position(|w| *w > 1e-6)?;
                let last = t.window_a.iter().rposition(|w| *w > 1e-6)?;
                let (t0, t1) = (t.time_s[first], t.time_s[last]);
                let w = (t1 - t0).max(1e-4);
                Some([t0 - w, t1 + 2.0 * w])
            })
            .flatten();
        for (name, y, w, id, unit, x_range) in [
            ("channel A", &t.a, &t.window_a, "hit-a", a_label, zoom),
            (
                "channel B",
                &t.b,
                &t.window_b,
                "hit-b",
                "response (m/s²)".to_string(),
                None,
            ),
        ] {
            let pid = egui::Id::unique(id);
            let bounds = plots::last_bounds(ui.ctx(), pid);
            let pts = app
                .ui
                .plot_scratch
                .reduced_time(&t.time_s, y, bounds, columns);
            let peak = y.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-12);
            let wy: Vec<f64> = w.iter().map(|v| v * peak).collect();
            let wpts = app
                .ui
                .plot_scratch
                .reduced_time(&t.time_s, &wy, bounds, columns);
            let mut plot = plots::plot(pid)
                .height(h_each)
                .legend(
                    egui_plot::Legend::default()
                        .position(egui_plot::Corner::RightTop)
                        .background_alpha(0.85),
                )
                .y_axis_min_width(56.0)
                .x_axis_label(if x_range.is_some() {
                    "time from trigger (s) — zoomed on the force window; double-click resets"
                } else {
                    "time from trigger (s)"
                })
                .y_axis_label(unit);
            plot = match x_range {
                Some([a, b]) => plot.default_x_bounds(a, b),
                None if layout == Layout::Sensor => plot.link_axis(link, [true, false]),
                None => plot,
            };
            let t_start = t.time_s[0];
            let r = plot.show(ui, |p| {
                // Labelled at the foot of the shading: at its head the label sat on the window line.
                p.span(
                    egui_plot::Span::new("pretrigger", t_start..=0.0)
                        .fill(plots::idle().gamma_multiply(0.12))
                        .label_align(egui::Align2::LEFT_BOTTOM),
                );
                p.line(Line::new(name, pts).color(accent()));
                p.line(
                    Line::new(
                        if name == "channel A" && layout == Layout::Hammer {
                            "force × exponential window (dashed, scaled to the peak)"
                        } else {
                            "exponential window (dashed, scaled to the peak)"
                        },
                        wpts,
                    )
                    .color(warn())
                    .style(LineStyle::dashed_loose()),
                );
                p.vline(VLine::new("trigger", 0.0).color(good()));
            });
            plots::keep_bounds(ui.ctx(), pid, *r.transform.bounds());
        }
        let fpts: Vec<[f64; 2]> = t
            .spectrum_freq_hz
            .iter()
            .zip(&t.spectrum_a_db)
            .map(|(f, d)| [*f, *d])
            .collect();
        let title = match layout {
            Layout::Hammer => "force spectrum (dB re its largest line)",
            Layout::Sensor => "reference spectrum (dB re its largest line)",
        };
        plots::plot("hit-spectrum")
            .height(h_each)
            .legend(
                egui_plot::Legend::default()
                    .position(egui_plot::Corner::LeftBottom)
                    .background_alpha(0.85),
            )
            .x_axis_label("frequency (Hz)")
            .y_axis_label(title)
            .include_y(0.0)
            .include_y(-rolloff - 10.0)
            .show(ui, |p| {
                p.line(Line::new("windowed channel A", fpts).color(accent()));
                if layout == Layout::Hammer {
                    p.hline(
                        HLine::new(format!("roll-off limit −{rolloff:.0} dB"), -rolloff)
                            .color(bad()),
                    );
                }
                if let Some([lo, hi]) = band {
                    p.vline(VLine::new("analysis band", lo).color(plots::idle()));
                    p.vline(VLine::new("analysis band", hi).color(plots::idle()));
                }
            });
    });
    for c in cmds {
        app.push(c);
    }
}

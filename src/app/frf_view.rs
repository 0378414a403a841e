//! FRF review: magnitude (dB), phase and coherence on linked frequency axes, one station or
//! several overlaid, and the mode indicator with the modes found.

use eframe::egui::{self, RichText};
use egui_plot::{Line, Plot, VLine};

use super::plots::{self, FreqAxis, accent, warn};
use super::{ViewCtx, station_map};
use crate::setup::Layout;

/// A plot of the review: its name, the plot, the plotted value of trace i at line k.
type Pane<'a> = (&'static str, Plot<'a>, &'a dyn Fn(usize, usize) -> f64);

/// The stations drawn and their colours: the current one in the accent colour, the others by
/// their order among those shown.
fn shown_traces(
    stations: &[u32],
    current: Option<u32>,
    all: bool,
    overlay: &std::collections::BTreeSet<u32>,
) -> Vec<(usize, egui::Color32)> {
    let mut n = 0;
    let mut out = Vec::new();
    for (i, &s) in stations.iter().enumerate() {
        if !(all || current == Some(s) || overlay.contains(&s)) {
            continue;
        }
        out.push((
            i,
            if current == Some(s) {
                accent()
            } else {
                plots::trace_color(n)
            },
        ));
        n += 1;
    }
    out
}

/// The line nearest frequency `fx` (Hz) in `f`.
fn nearest_line(f: &[f64], fx: f64) -> usize {
    let k = f
        .partition_point(|&v| v < fx)
        .min(f.len().saturating_sub(1));
    if k > 0 && (f[k - 1] - fx).abs() < (f[k] - fx).abs() {
        k - 1
    } else {
        k
    }
}

/// The hover read-out: the curve under the pointer (else the current station's) and its value
/// at the nearest line, not the cursor's height.
fn readout<'a>(
    stations: &'a [u32],
    f: &'a [f64],
    axis: FreqAxis,
    cur_i: Option<usize>,
    yunit: &'a str,
    value: &'a dyn Fn(usize, usize) -> f64,
) -> impl Fn(&egui_plot::HoverPosition<'_>) -> Option<String> + 'a {
    move |p| {
        let (name, x) = match p {
            egui_plot::HoverPosition::NearDataPoint {
                plot_name,
                position,
                ..
            } => (*plot_name, position.x),
            egui_plot::HoverPosition::Elsewhere { position } => ("", position.x),
        };
        let i = stations
            .iter()
            .position(|s| name == format!("station {s}"))
            .or(cur_i)?;
        if f.is_empty() {
            return None;
        }
        let k = nearest_line(f, axis.f(x));
        Some(format!(
            "station {}\n{:.1} Hz\n{:.2} {yunit}",
            stations[i],
            f[k],
            value(i, k)
        ))
    }
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    station_map::strip(ui, app, 96.0);
    let Some(doc) = app.doc else {
        return;
    };
    let Some(frfs) = doc.frfs.clone() else {
        ui.label(doc.analysis_error.clone().unwrap_or_else(|| {
            "No FRF yet: the analysis is running or no hit was accepted.".into()
        }));
        return;
    };
    let modal = doc.modal.clone();
    let layout = frfs.layout;
    let (quantity, unit) = match layout {
        Layout::Hammer => ("accelerance", "dB re 1 (m/s²)/N"),
        Layout::Sensor => ("transmissibility", "dB re 1"),
    };
    let axis = FreqAxis {
        log: app.settings.log_frequency,
    };
    // Each shown station's colour, for the key beside its checkbox.
    let key = shown_traces(
        &frfs.stations,
        app.ui.current_station,
        app.settings.overlay_all,
        &app.ui.overlay,
    );
    egui::Panel::left("frf-options")
        .default_size(230.0)
        .show(ui, |ui| {
            ui.heading("Show");
            ui.checkbox(&mut app.settings.log_frequency, "log frequency axis");
            ui.checkbox(&mut app.settings.show_phase, "phase plot");
            ui.checkbox(&mut app.settings.overlay_all, "overlay every station");
            ui.separator();
            // Where the hammer's force spectrum stays within the roll-off limit: lines above count
            // less in the fit (the dashed line in the plots).
            let edge = app
                .ui.current_station
                .and_then(|s| frfs.stations.iter().position(|&x| x == s))
                .and_then(|i| frfs.usable_hi_hz.get(i).copied())
                .filter(|e| e.is_finite());
            match edge {
                Some(e) => ui.label(format!(
                    "Usable band ends at {e:.0} Hz (force spectrum 20 dB down): lines above count less in the fit."
                )),
                None if layout == Layout::Hammer => {
                    ui.label("Force spectrum within 20 dB over the whole band.")
                }
                None => ui.label(""),
            };
            ui.separator();
            ui.label("Overlay stations:");
            egui::ScrollArea::vertical()
                .max_height(ui.available_height() - 40.0)
                .show(ui, |ui| {
                    for &s in &frfs.stations {
                        let mut on = app.ui.overlay.contains(&s);
                        let key = key
                            .iter()
                            .find(|(i, _)| frfs.stations[*i] == s)
                            .map(|(_, c)| *c);
                        let changed = ui
                            .horizontal(|ui| {
                                let (r, p) =
                                    ui.allocate_painter(egui::vec2(18.0, 4.0), egui::Sense::hover());
                                if let Some(c) = key {
                                    p.line_segment(
                                        [r.rect.left_center(), r.rect.right_center()],
                                        egui::Stroke::new(3.0, c),
                                    );
                                }
                                let current = app.ui.current_station == Some(s);
                                let text = if current {
                                    format!("station {s} (current)")
                                } else {
                                    format!("station {s}")
                                };
                                ui.checkbox(&mut on, text).changed()
                            })
                            .inner;
                        if changed {
                            if on {
                                app.ui.overlay.insert(s);
                            } else {
                                app.ui.overlay.remove(&s);
                            }
                        }
                    }
                });
        });
    // Again after the panel, so a checkbox ticked this frame shows at once.
    let current = app.ui.current_station;
    let shown_colours = shown_traces(
        &frfs.stations,
        current,
        app.settings.overlay_all,
        &app.ui.overlay,
    );
    let shown: Vec<usize> = shown_colours.iter().map(|(i, _)| *i).collect();
    egui::CentralPanel::default().show(ui, |ui| {
        if shown.is_empty() {
            ui.label(
                "The current station has no FRF (no accepted hit); pick another or overlay some.",
            );
        }
        let n_plots = if app.settings.show_phase { 4.0 } else { 3.0 };
        let h_each = ((ui.available_height() - 10.0 * n_plots) / n_plots).max(110.0);
        let link = egui::Id::unique("frf-x");
        let f = &frfs.freq_hz;
        let cur_i = current.and_then(|s| frfs.stations.iter().position(|&x| x == s));
        let nearest = move |x: f64| nearest_line(f, axis.f(x));
        let usable_edge = current
            .and_then(|s| frfs.stations.iter().position(|&x| x == s))
            .and_then(|i| frfs.usable_hi_hz.get(i).copied())
            .filter(|e| e.is_finite());
        let mode_lines = |p: &mut egui_plot::PlotUi<'_>| {
            if let Some(e) = usable_edge {
                p.vline(
                    VLine::new("usable band ends", axis.x(e))
                        .color(egui::Color32::GRAY)
                        .style(egui_plot::LineStyle::dashed_loose()),
                );
            }
            if let Some(m) = &modal {
                for (k, md) in m.modes.iter().enumerate() {
                    p.vline(
                        VLine::new(format!("mode {}", k + 1), axis.x(md.measured_frequency_hz))
                            .color(warn().gamma_multiply(0.6)),
                    );
                }
            }
        };
        let traces: Vec<(usize, String, egui::Color32)> = shown_colours
            .iter()
            .map(|&(i, c)| (i, format!("station {}", frfs.stations[i]), c))
            .collect();
        let highlight = frfs.stations.iter().position(|&s| Some(s) == current);
        let base = (
            app.analysis_stamp,
            std::sync::Arc::as_ptr(&frfs) as usize,
            shown.clone(),
            axis.log,
        );
        let h = &frfs.h;
        let coh = &frfs.coherence;
        let mag = |i: usize, k: usize| plots::db(h[i][k].norm());
        let phase = |i: usize, k: usize| h[i][k].arg().to_degrees();
        let coherence = |i: usize, k: usize| coh[i][k];
        let stations = &frfs.stations;
        let mut panes: Vec<Pane<'_>> = vec![(
            "frf-mag",
            axis.configure(plots::plot("frf-mag"))
                .y_axis_label(format!("{quantity}\n{unit}"))
                .label_formatter(readout(stations, f, axis, cur_i, unit, &mag)),
            &mag,
        )];
        if app.settings.show_phase {
            panes.push((
                "frf-phase",
                axis.configure(plots::plot("frf-phase"))
                    .include_y(-180.0)
                    .include_y(180.0)
                    .y_axis_label("phase\ndegrees")
                    .label_formatter(readout(stations, f, axis, cur_i, "°", &phase)),
                &phase,
            ));
        }
        panes.push((
            "frf-coh",
            axis.configure(plots::plot("frf-coh"))
                .include_y(0.0)
                .include_y(1.05)
                .y_axis_label("coherence\nγ² (0…1)")
                .label_formatter(readout(stations, f, axis, cur_i, "", &coherence)),
            &coherence,
        ));
        for (name, plot, value) in panes {
            let plot = plot
                .height(h_each)
                .y_axis_min_width(56.0)
                .link_axis(link, [true, false])
                .link_cursor(link, [true, false]);
            let cache = app.ui.overlays.entry(name).or_default();
            plots::overlaid(
                ui,
                plot,
                egui::Id::unique(name),
                &mut app.ui.plot_scratch,
                cache,
                plots::stamp((&base, name)),
                f,
                axis,
                &traces,
                highlight,
                value,
                mode_lines,
            );
        }
        // Mode indicator
        let id = egui::Id::unique("frf-mif");
        let Some(ind) = app.doc.as_ref().and_then(|d| d.indicators.clone()) else {
            return;
        };
        let (name, yunit, vals): (&str, &str, Vec<f64>) = match layout {
            Layout::Hammer => (
                "Σ|H| over stations",
                "dB re 1 (m/s²)/N",
                ind.sum_abs.iter().map(|v| plots::db(*v)).collect(),
            ),
            Layout::Sensor => (
                "Σ response auto-spectra",
                "dB re 1 (m/s²)²/Hz",
                ind.sum_response_autospectra
                    .iter()
                    .map(|v| 10.0 * v.max(1e-300).log10())
                    .collect(),
            ),
        };
        let columns = ui.available_width() as usize;
        let b = plots::last_bounds(ui.ctx(), egui::Id::unique("frf-mag"));
        let pts = app
            .ui
            .plot_scratch
            .reduced(f, |k| vals[k], axis, b, columns);
        axis.configure(plots::plot(id))
            .height(h_each)
            .link_axis(link, [true, false])
            .link_cursor(link, [true, false])
            .y_axis_label(format!("mode indicator\n{yunit}"))
            .y_axis_min_width(56.0)
            .label_formatter(|p| {
                let x = match p {
                    egui_plot::HoverPosition::NearDataPoint { position, .. }
                    | egui_plot::HoverPosition::Elsewhere { position } => position.x,
                };
                let k = nearest(x);
                let v = vals.get(k)?;
                Some(format!("{name}\n{:.1} Hz\n{v:.2} {yunit}", f[k]))
            })
            .show(ui, |p| {
                p.line(Line::new(name, pts).color(accent()));
                if let Some(m) = &modal {
                    for (k, md) in m.modes.iter().enumerate() {
                        p.vline(
                            VLine::new(
                                format!("mode {} — {:.1} Hz", k + 1, md.frequency_hz),
                                axis.x(md.measured_frequency_hz),
                            )
                            .color(warn()),
                        );
                    }
                }
            });
        if let Some(m) = &modal {
            ui.horizontal_wrapped(|ui| {
                ui.label(RichText::new("Modes:").strong());
                for (k, md) in m.modes.iter().enumerate() {
                    ui.label(format!("{} — {:.1} Hz", k + 1, md.frequency_hz));
                }
            });
        }
    });
}

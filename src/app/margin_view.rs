//! Speed margins: natural frequencies against support stiffness (the bearings in service swept
//! from nearly free to nearly rigid) with the running-speed orders and the bearing-stiffness band
//! overlaid, the critical speeds at nominal stiffness, and the separation-margin check.

use eframe::egui::{self, RichText};
use egui_plot::{Axis, GridMark, Line, MarkerShape, Points, Span, VLine};

use super::help::CAUTIONS;
use super::model_edit;
use super::plots::{self, accent, bad, good, idle, warn};
use super::{Command, ViewCtx};
use crate::model::margin::Side;
use crate::model::study::{ResonanceSource, Study, StudyResult};

pub use crate::cautions::{MAP_NOTE, MARGIN_NOTE};

fn decade_tick(m: GridMark) -> String {
    let v = 10f64.powf(m.value);
    if (m.value - m.value.round()).abs() < 1e-6 {
        format!("1e{}", m.value.round())
    } else if v >= 1000.0 {
        format!("{v:.0}")
    } else {
        format!("{v:.3}")
    }
}

fn rpm_tick(m: GridMark) -> String {
    let v = 10f64.powf(m.value);
    if v >= 100.0 {
        format!("{v:.0}")
    } else {
        format!("{v:.1}")
    }
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let mut cmds = Vec::new();
    let orders_edit = &mut app.ui.orders_edit;
    let Some(doc) = app.doc else {
        return;
    };
    let Some(mut study) = doc.study.clone() else {
        ui.vertical_centered(|ui| {
            ui.add_space(80.0);
            ui.label(
                RichText::new("No shaft model yet: make one in the Shaft model view.").size(20.0),
            );
            if ui.button("Start from the stations").clicked() {
                cmds.push(Command::NewModel);
            }
        });
        for c in cmds {
            app.push(c);
        }
        return;
    };
    let text = orders_edit.get_or_insert_with(|| {
        study
            .orders
            .iter()
            .map(|k| k.to_string())
            .collect::<Vec<_>>()
            .join(",")
    });
    egui::Panel::left("service-editor")
        .default_size(400.0)
        .show(ui, |ui| {
            egui::ScrollArea::vertical().show(ui, |ui| {
                ui.heading("In service");
                // Any difference is sent, whether or not the editor flagged it.
                if model_edit::service_editor(ui, &mut study, text)
                    || doc.study.as_ref() != Some(&study)
                {
                    cmds.push(Command::EditStudy(Box::new(study.clone())));
                }
            });
        });
    let study = study.clone();
    let result = doc.study_result.clone();
    let error = doc.study_error.clone();
    egui::CentralPanel::default().show(ui, |ui| {
        if let Some(e) = &error {
            ui.label(RichText::new(format!("The model cannot be solved: {e}")).color(bad()));
        }
        let Some(r) = result else {
            ui.label("Solving the shaft model…");
            return;
        };
        ui.label(RichText::new(MAP_NOTE).color(warn()));
        if let Some([lo, hi]) = study.bearing_band_n_per_m {
            ui.label(format!(
                "Blue band: the bearings' stiffness in service, {} to {}. Red bands: the running \
                 speed range × each order. Diamonds on the dashed line: critical speeds at the \
                 nominal stiffness.",
                model_edit::with_prefix(lo, "N/m"),
                model_edit::with_prefix(hi, "N/m")
            ));
        }
        let h = (ui.available_height() * 0.55).max(240.0);
        map_plot(ui, &study, &r, h);
        ui.separator();
        egui::ScrollArea::vertical()
            .id_salt("margin-scroll")
            .show(ui, |ui| {
                critical_speeds(ui, &study, &r);
                ui.add_space(6.0);
                margin_table(ui, &study, &r);
                ui.add_space(6.0);
                ui.label(RichText::new(MARGIN_NOTE).color(warn()));
                for c in CAUTIONS.iter().skip(3) {
                    ui.label(RichText::new(format!("• {c}")).small());
                }
            });
    });
    for c in cmds {
        app.push(c);
    }
}

fn map_plot(ui: &mut egui::Ui, study: &Study, r: &StudyResult, height: f32) {
    let Some(map) = &r.map else {
        ui.label(
            "No supports to sweep: add the bearings in service (left) to see how the critical \
             speeds move with their stiffness.",
        );
        return;
    };
    let what = if map.bearings {
        "the bearings in service"
    } else {
        "the bench supports (no bearings given)"
    };
    ui.label(RichText::new(format!("Critical speeds against the stiffness of {what}")).strong());
    let xs: Vec<f64> = map.stiffness_n_per_m.iter().map(|k| k.log10()).collect();
    let (x_lo, x_hi) = (
        xs.first().copied().unwrap_or(0.0),
        xs.last().copied().unwrap_or(1.0),
    );
    let nominal: Vec<f64> = study
        .in_service()
        .map(|s| s.supports.iter().map(|b| b.stiffness_n_per_m).collect())
        .unwrap_or_else(|| {
            study
                .shaft
                .supports
                .iter()
                .map(|b| b.stiffness_n_per_m)
                .collect()
        });
    let service_rpm: Vec<f64> = r
        .service
        .as_ref()
        .map(|c| c.modes.iter().map(|m| m.frequency_hz * 60.0).collect())
        .unwrap_or_default();
    let ui_text = ui.visuals().strong_text_color();
    plots::plot("stiffness-map")
        .height(height)
        .x_axis_label("support stiffness (N/m, log scale)")
        .y_axis_label("critical speed = 60 × natural frequency (rpm, log scale)")
        .x_axis_formatter(|m, _| decade_tick(m))
        .y_axis_formatter(|m, _| rpm_tick(m))
        .x_grid_spacer(egui_plot::log_grid_spacer(10))
        .y_grid_spacer(egui_plot::log_grid_spacer(10))
        .include_x(x_lo)
        .include_x(x_hi)
        .show(ui, |p| {
            if let Some([lo, hi]) = study.running_speed_rpm {
                for (n, &k) in study.orders.iter().enumerate() {
                    // The orders fade with their number; all share the warning hue so they never
                    // read as one of the mode lines.
                    let c = bad().gamma_multiply(1.0 / (n as f32 + 1.0));
                    p.span(
                        Span::new("", (k as f64 * lo).log10()..=(k as f64 * hi).log10())
                            .axis(Axis::Y)
                            .fill(c.gamma_multiply(0.45))
                            .border_color(c)
                            .border_width(1.5),
                    );
                    // Labelled on the curve itself, at the left edge: a legend hid the plot.
                    p.text(
                        egui_plot::Text::new(
                            "",
                            egui_plot::PlotPoint::new(x_lo, (k as f64 * hi).log10()),
                            RichText::new(format!("{k}× running speed"))
                                .strong()
                                .color(bad()),
                        )
                        .anchor(egui::Align2::LEFT_BOTTOM)
                        .color(bad()),
                    );
                }
            }
            if let Some([lo, hi]) = study.bearing_band_n_per_m {
                p.span(
                    // Named in the caption below the plot: a label inside a narrow band is clipped.
                    Span::new("", lo.log10()..=hi.log10())
                        .axis(Axis::X)
                        .fill(accent().gamma_multiply(0.2))
                        .border_color(accent()),
                );
            }
            for (i, row) in map.frequencies_hz.iter().enumerate() {
                let pts: Vec<[f64; 2]> = xs
                    .iter()
                    .zip(row)
                    .filter(|(_, f)| **f > 0.0)
                    .map(|(x, f)| [*x, (f * 60.0).log10()])
                    .collect();
                let end = pts.last().copied();
                let c = plots::trace_color(i);
                p.line(
                    Line::new(format!("mode {}", i + 1), pts)
                        .color(c)
                        .width(2.0),
                );
                if let Some([x, y]) = end {
                    p.text(
                        egui_plot::Text::new(
                            "",
                            egui_plot::PlotPoint::new(x, y),
                            RichText::new(format!("mode {}", i + 1)).strong().color(c),
                        )
                        .anchor(egui::Align2::RIGHT_BOTTOM)
                        .color(c),
                    );
                }
            }
            if let Some(&k) = nominal.first().filter(|k| **k > 0.0) {
                p.vline(
                    VLine::new("nominal stiffness", k.log10())
                        .color(idle())
                        .style(egui_plot::LineStyle::dashed_loose()),
                );
                if map.bearings && !service_rpm.is_empty() {
                    p.points(
                        Points::new(
                            "critical speeds at nominal stiffness",
                            service_rpm
                                .iter()
                                .filter(|v| **v > 0.0)
                                .map(|v| [k.log10(), v.log10()])
                                .collect::<Vec<_>>(),
                        )
                        .shape(MarkerShape::Diamond)
                        .radius(7.0)
                        .color(ui_text)
                        .filled(true),
                    );
                }
            }
        });
    let uneven = nominal
        .windows(2)
        .any(|w| (w[0] - w[1]).abs() > 1e-9 * w[0]);
    if uneven {
        ui.label(
            RichText::new(
                "The bearings differ in stiffness: the sweep sets all of them to each value; the \
                 dashed line marks the first bearing's.",
            )
            .small(),
        );
    }
}

fn critical_speeds(ui: &mut egui::Ui, study: &Study, r: &StudyResult) {
    let Some(c) = &r.service else {
        ui.label("Give the bearings in service to compute installed critical speeds.");
        return;
    };
    let ks: Vec<String> = study
        .bearings
        .iter()
        .map(|b| format!("{:.2e}", b.stiffness_n_per_m))
        .collect();
    ui.label(
        RichText::new(format!(
            "Critical speeds on the bearings at nominal stiffness ({} N/m)",
            ks.join(", ")
        ))
        .strong(),
    );
    ui.horizontal_wrapped(|ui| {
        for (j, m) in c.modes.iter().enumerate() {
            ui.label(format!(
                "{}: {:.1} Hz = {:.0} rpm",
                j + 1,
                m.frequency_hz,
                m.frequency_hz * 60.0
            ));
            ui.separator();
        }
    });
}

fn margin_table(ui: &mut egui::Ui, study: &Study, r: &StudyResult) {
    let Some([lo, hi]) = study.running_speed_rpm else {
        ui.label("Give the operating range (left) for the margin check.");
        return;
    };
    ui.label(
        RichText::new(format!(
            "Separation margins, operating range {lo:.0}–{hi:.0} rpm (closest first)"
        ))
        .strong(),
    );
    // The verdict first, then the lines.
    let close: Vec<&crate::model::study::MarginLine> =
        r.margins.iter().filter(|l| !l.check.ok).collect();
    if close.is_empty() {
        ui.label(
            RichText::new(format!(
                "All {} resonance–order lines clear the rule.",
                r.margins.len()
            ))
            .color(good()),
        );
    } else {
        let worst = close
            .iter()
            .map(|l| l.check.critical_rpm)
            .map(|c| format!("{c:.0} rpm"))
            .collect::<Vec<_>>()
            .join(", ");
        ui.label(
            RichText::new(format!(
                "{} of {} lines TOO CLOSE to the operating range: critical speeds at {worst}.",
                close.len(),
                r.margins.len()
            ))
            .color(bad())
            .strong(),
        );
    }
    egui::Grid::new("margin-grid")
        .striped(true)
        .num_columns(10)
        .show(ui, |ui| {
            for h in [
                "resonance",
                "mode",
                "f (Hz)",
                "order",
                "excited at (rpm)",
                "AF",
                "where",
                "margin (%)",
                "rule asks (%)",
                "verdict",
            ] {
                ui.label(RichText::new(h).strong());
            }
            ui.end_row();
            let lines = r.margins_closest_first();
            for l in lines {
                let c = &l.check;
                ui.label(match l.source {
                    ResonanceSource::Measured => "measured (bench)",
                    ResonanceSource::ModelInService => "model on bearings",
                    ResonanceSource::ModelAsTested => "model as tested",
                });
                ui.label(l.mode.to_string());
                ui.label(format!("{:.2}", c.frequency_hz));
                ui.label(format!("{}×", c.order));
                ui.label(format!("{:.0}", c.critical_rpm));
                ui.label(if c.amplification_factor.is_finite() {
                    format!("{:.1}", c.amplification_factor)
                } else {
                    "unknown".into()
                });
                ui.label(match c.side {
                    Side::Below => "below",
                    Side::Inside => "INSIDE",
                    Side::Above => "above",
                });
                ui.label(format!("{:.1}", c.margin_pct));
                ui.label(if c.required_pct.is_finite() {
                    format!("{:.1}", c.required_pct)
                } else {
                    "—".into()
                });
                if c.ok {
                    ui.label(RichText::new("clear").color(good()));
                } else {
                    ui.label(RichText::new("TOO CLOSE").color(bad()).strong());
                }
                ui.end_row();
            }
        });
    ui.label(
        RichText::new(
            "AF by the half-power method, 1/(2ζ); model resonances are undamped, so the rule's \
             largest margin applies to them.",
        )
        .small(),
    );
}

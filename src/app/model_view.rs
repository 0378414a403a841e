//! The shaft model: a to-scale drawing of the part (sections, discs, bench supports, bearings,
//! stations), a measured mode and a model mode animated side by side, the correlation table and
//! the test × model MAC.

use eframe::egui::{self, Align2, Color32, FontId, RichText, Sense, Stroke, pos2, vec2};
use egui_plot::{Line, LineStyle, MarkerShape, Plot, Points};

use super::model_edit;
use super::plots::{self, accent, bad, good, idle, warn};
use super::{Command, PathPurpose, ViewCtx};
use crate::model::run::interpolate;
use crate::model::study::{Study, StudyResult};

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let mut cmds = Vec::new();
    let Some(doc) = app.doc else {
        return;
    };
    let Some(mut study) = doc.study.clone() else {
        ui.vertical_centered(|ui| {
            ui.add_space(80.0);
            ui.label(RichText::new("This test has no shaft model yet.").size(22.0));
            ui.label(
                "Describe the part as sections, discs and supports to compare the measured modes \
                 with a Timoshenko beam model and check running-speed margins.",
            );
            ui.add_space(12.0);
            if ui.button("Start from the stations").clicked() {
                cmds.push(Command::NewModel);
            }
            if ui.button("Read a shaft model (JSON)…").clicked() {
                cmds.push(Command::AskPath(PathPurpose::LoadModel));
            }
        });
        for c in cmds {
            app.push(c);
        }
        return;
    };
    egui::Panel::left("model-editor")
        .default_size(430.0)
        .show(ui, |ui| {
            egui::ScrollArea::vertical().show(ui, |ui| {
                ui.heading("Shaft as tested");
                ui.horizontal(|ui| {
                    if ui.button("Read JSON…").clicked() {
                        cmds.push(Command::AskPath(PathPurpose::LoadModel));
                    }
                    if ui.button("Write JSON…").clicked() {
                        cmds.push(Command::AskPath(PathPurpose::WriteModel));
                    }
                });
                // Any difference is sent, whether or not the editor flagged it.
                if model_edit::shaft_editor(ui, &mut study) || doc.study.as_ref() != Some(&study) {
                    cmds.push(Command::EditStudy(Box::new(study.clone())));
                }
            });
        });
    let study = study.clone();
    let result = doc.study_result.clone();
    let error = doc.study_error.clone();
    let modal = doc.modal.clone();
    let stations: Vec<(u32, f64)> = doc
        .data
        .stations
        .iter()
        .map(|s| (s.station, s.position_m))
        .collect();
    egui::CentralPanel::default().show(ui, |ui| {
        if let Some(e) = &error {
            ui.label(RichText::new(format!("The model cannot be solved: {e}")).color(bad()));
        }
        drawing(ui, &study, &stations, 190.0);
        let Some(r) = result else {
            ui.label("Solving the shaft model…");
            return;
        };
        for w in &r.warnings {
            ui.label(RichText::new(w).color(warn()).small());
        }
        let n_test = modal.as_ref().map_or(0, |m| m.modes.len());
        let test_sel = (n_test > 0).then(|| app.ui.selected_mode.min(n_test - 1));
        let model_sel = app
            .ui
            .selected_model_mode
            .filter(|&j| j < r.tested.modes.len())
            .or_else(|| {
                let k = test_sel?;
                r.correlation
                    .as_ref()?
                    .pairs
                    .iter()
                    .find(|p| p.test == k)
                    .map(|p| p.model)
            })
            .or_else(|| r.tested.modes.iter().position(|m| !m.rigid_body));
        let h = (ui.available_height() * 0.5).max(220.0);
        ui.columns(2, |cols| {
            match (&modal, test_sel) {
                (Some(m), Some(k)) => measured_plot(&mut cols[0], app, m, k, &r, model_sel, h),
                _ => {
                    cols[0].label("No fitted test mode to compare (see Pole picking).");
                }
            }
            if let Some(j) = model_sel {
                model_plot(&mut cols[1], app, &r, j, modal.as_deref(), test_sel, h);
            }
        });
        ui.separator();
        egui::ScrollArea::vertical()
            .id_salt("correlation-scroll")
            .show(ui, |ui| {
                ui.horizontal_top(|ui| {
                    // The heat map keeps the room its cells need; the table wraps beside it.
                    let mac_w = mac_panel_width(&r);
                    let table_w = (ui.available_width() - mac_w - 24.0).max(320.0);
                    ui.vertical(|ui| {
                        ui.set_max_width(table_w);
                        let test_hz: Vec<f64> = modal
                            .as_ref()
                            .map(|m| m.modes.iter().map(|x| x.frequency_hz).collect())
                            .unwrap_or_default();
                        correlation_table(ui, &r, &test_hz, test_sel, model_sel, &mut cmds);
                    });
                    ui.separator();
                    ui.vertical(|ui| {
                        ui.set_min_width(mac_w);
                        ui.set_max_width(mac_w);
                        mac_panel(ui, &r, test_sel, model_sel, &mut cmds);
                    });
                });
            });
    });
    for c in cmds {
        app.push(c);
    }
}

/// Screen mapping of the part: x along the length, y across it, to one scale unless the part is
/// too slender to see, then with the diameters exaggerated by a stated whole factor.
struct Scale {
    x0: f32,
    y0: f32,
    px_per_m: f32,
    exaggeration: f32,
}

impl Scale {
    fn x(&self, m: f64) -> f32 {
        self.x0 + m as f32 * self.px_per_m
    }
    fn half(&self, d_m: f64) -> f32 {
        0.5 * d_m as f32 * self.px_per_m * self.exaggeration
    }
}

/// The part to scale: sections (bores dashed), discs, bench supports as springs below, bearings
/// in service as triangles above, stations as numbered ticks; a 100 mm scale bar.
pub fn drawing(ui: &mut egui::Ui, study: &Study, stations: &[(u32, f64)], height: f32) {
    let shaft = &study.shaft;
    let length = shaft.length_m().max(1e-6);
    let (resp, painter) = ui.allocate_painter(vec2(ui.available_width(), height), Sense::hover());
    let rect = resp.rect;
    let text = ui.visuals().text_color();
    let metal = if ui.visuals().dark_mode {
        Color32::from_gray(150)
    } else {
        Color32::from_gray(170)
    };
    let d_max = shaft
        .sections
        .iter()
        .map(|s| s.outer_diameter_m)
        .fold(0.0f64, f64::max)
        .max(1e-6);
    let px_per_m = (rect.width() - 60.0) / length as f32;
    // Room across: the middle ~45 % of the height, leaving space for ticks, springs and labels.
    let room = 0.45 * height;
    let natural = d_max as f32 * px_per_m;
    let exaggeration = if natural >= 0.25 * room {
        1.0
    } else {
        (0.6 * room / natural).floor().max(1.0)
    };
    let sc = Scale {
        x0: rect.left() + 30.0,
        y0: rect.top() + 0.5 * height,
        px_per_m,
        exaggeration,
    };
    painter.line_segment(
        [
            pos2(sc.x(-0.02 * length), sc.y0),
            pos2(sc.x(1.02 * length), sc.y0),
        ],
        Stroke::new(1.0, idle()),
    );
    let mut x = 0.0;
    for s in &shaft.sections {
        let (a, b) = (sc.x(x), sc.x(x + s.length_m));
        let h = sc.half(s.outer_diameter_m);
        painter.rect_filled(
            egui::Rect::from_min_max(pos2(a, sc.y0 - h), pos2(b, sc.y0 + h)),
            0.0,
            metal,
        );
        painter.rect_stroke(
            egui::Rect::from_min_max(pos2(a, sc.y0 - h), pos2(b, sc.y0 + h)),
            0.0,
            Stroke::new(1.0, text),
            egui::StrokeKind::Middle,
        );
        if s.inner_diameter_m > 0.0 {
            let hi = sc.half(s.inner_diameter_m);
            for y in [sc.y0 - hi, sc.y0 + hi] {
                painter.add(egui::Shape::dashed_line(
                    &[pos2(a, y), pos2(b, y)],
                    Stroke::new(1.0, text),
                    4.0,
                    3.0,
                ));
            }
        }
        x += s.length_m;
    }
    let half_at = |p: f64| sc.half(shaft.section_at(p).outer_diameter_m);
    for d in &shaft.discs {
        let cx = sc.x(d.position_m);
        let h = (2.2 * half_at(d.position_m)).max(14.0);
        painter.rect_filled(
            egui::Rect::from_center_size(pos2(cx, sc.y0), vec2(8.0, 2.0 * h)),
            1.0,
            warn(),
        );
        painter.text(
            pos2(cx + 6.0, sc.y0 - h),
            Align2::LEFT_BOTTOM,
            format!("{:.2} kg", d.mass_kg),
            FontId::proportional(12.0),
            text,
        );
    }
    for s in &shaft.supports {
        let cx = sc.x(s.position_m);
        let top = sc.y0 + half_at(s.position_m);
        spring(&painter, cx, top, top + 0.22 * height, good());
        painter.text(
            pos2(cx + 8.0, top + 0.2 * height),
            Align2::LEFT_BOTTOM,
            format!("{:.1e} N/m", s.stiffness_n_per_m),
            FontId::proportional(12.0),
            good(),
        );
    }
    for b in &study.bearings {
        let cx = sc.x(b.position_m);
        let top = sc.y0 - half_at(b.position_m);
        let tri = vec![
            pos2(cx, top),
            pos2(cx - 8.0, top - 14.0),
            pos2(cx + 8.0, top - 14.0),
        ];
        painter.add(egui::Shape::convex_polygon(
            tri,
            Color32::TRANSPARENT,
            Stroke::new(2.0, accent()),
        ));
    }
    let tick_y = rect.top() + 16.0;
    for &(st, p) in stations {
        let cx = sc.x(p);
        painter.line_segment(
            [pos2(cx, tick_y + 4.0), pos2(cx, sc.y0 - half_at(p) - 2.0)],
            Stroke::new(1.0, accent().gamma_multiply(0.6)),
        );
        painter.text(
            pos2(cx, tick_y),
            Align2::CENTER_CENTER,
            st.to_string(),
            FontId::proportional(12.0),
            accent(),
        );
    }
    // Scale bar and legend.
    let bar_y = rect.bottom() - 10.0;
    let bar = 0.1 * px_per_m;
    painter.line_segment(
        [pos2(sc.x0, bar_y), pos2(sc.x0 + bar, bar_y)],
        Stroke::new(2.0, text),
    );
    painter.text(
        pos2(sc.x0 + bar + 8.0, bar_y),
        Align2::LEFT_CENTER,
        "100 mm",
        FontId::proportional(12.0),
        text,
    );
    let mut legend = format!(
        "Length {:.0} mm · springs: bench supports · triangles: bearings in service · numbers: \
         stations",
        length * 1e3
    );
    if exaggeration > 1.0 {
        legend.push_str(&format!(" · diameters ×{exaggeration:.0}"));
    } else {
        legend.push_str(" · to scale");
    }
    ui.label(RichText::new(legend).small());
}

fn spring(painter: &egui::Painter, x: f32, y0: f32, y1: f32, c: Color32) {
    let n = 8;
    let mut pts = vec![pos2(x, y0)];
    let lead = 0.15 * (y1 - y0);
    pts.push(pos2(x, y0 + lead));
    for i in 0..n {
        let t = (i as f32 + 0.5) / n as f32;
        let y = y0 + lead + t * (y1 - y0 - 2.0 * lead);
        pts.push(pos2(x + if i % 2 == 0 { 6.0 } else { -6.0 }, y));
    }
    pts.push(pos2(x, y1 - lead));
    pts.push(pos2(x, y1));
    painter.add(egui::Shape::line(pts, Stroke::new(1.5, c)));
    for k in 0..4 {
        let xx = x - 9.0 + 6.0 * k as f32;
        painter.line_segment(
            [pos2(xx, y1), pos2(xx - 4.0, y1 + 5.0)],
            Stroke::new(1.0, c),
        );
    }
}

/// A model mode at the nodes, largest = 1, signed to agree with test mode `test` when given.
fn model_shape(r: &StudyResult, j: usize, test: Option<(&[f64], &[f64])>) -> (Vec<f64>, Vec<f64>) {
    let nodes = r.tested.nodes_m.clone();
    let d = &r.tested.modes[j].displacement;
    let big = d.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-300);
    let mut v: Vec<f64> = d.iter().map(|x| x / big).collect();
    if let Some((pos, shape)) = test {
        let dot: f64 = pos
            .iter()
            .zip(shape)
            .map(|(&x, &s)| s * interpolate(&nodes, &v, x))
            .sum();
        if dot < 0.0 {
            v.iter_mut().for_each(|x| *x = -*x);
        }
    }
    (nodes, v)
}

fn shape_plot_frame(id: &str, height: f32, x1: f64, limit: f64) -> Plot<'static> {
    plots::plot(id.to_owned())
        .height(height)
        .allow_drag(false)
        .allow_zoom(false)
        .allow_scroll(false)
        .include_y(-limit)
        .include_y(limit)
        .include_x(0.0)
        .include_x(x1)
        .x_axis_label("position along the part (m)")
}

fn measured_plot(
    ui: &mut egui::Ui,
    app: &ViewCtx,
    m: &crate::modal::ModalResult,
    k: usize,
    r: &StudyResult,
    model_sel: Option<usize>,
    height: f32,
) {
    let md = &m.modes[k];
    let amp = app.settings.amplitude as f64;
    let (c, s) = (app.ui.phase_rad.cos(), app.ui.phase_rad.sin());
    let pts: Vec<[f64; 2]> = m
        .positions_m
        .iter()
        .zip(&md.shape)
        .map(|(x, p)| [*x, amp * (p.re * c - p.im * s)])
        .collect();
    let real: Vec<f64> = md.shape.iter().map(|p| p.re).collect();
    ui.label(
        RichText::new(format!(
            "Measured mode {} — {:.2} Hz",
            k + 1,
            md.frequency_hz
        ))
        .size(17.0)
        .color(accent()),
    );
    let x1 = r.tested.nodes_m.last().copied().unwrap_or(1.0);
    let limit = 1.25 * amp.max(0.2);
    // The model mode drawn faintly over the stations, scaled to them by least squares.
    let overlay = model_sel.map(|j| {
        let (nodes, v) = model_shape(r, j, Some((&m.positions_m, &real)));
        let at: Vec<f64> = m
            .positions_m
            .iter()
            .map(|&x| interpolate(&nodes, &v, x))
            .collect();
        let num: f64 = at.iter().zip(&real).map(|(a, b)| a * b).sum();
        let den: f64 = at.iter().map(|a| a * a).sum::<f64>().max(1e-300);
        let alpha = num / den;
        let line: Vec<[f64; 2]> = nodes
            .iter()
            .zip(&v)
            .map(|(x, y)| [*x, amp * c * alpha * y])
            .collect();
        (j, line)
    });
    shape_plot_frame("measured-beside-model", height, x1, limit)
        .y_axis_label("shape (largest = 1)")
        .legend(egui_plot::Legend::default())
        .show(ui, |p| {
            p.line(
                Line::new("", vec![[0.0, 0.0], [x1, 0.0]])
                    .color(idle())
                    .width(5.0),
            );
            if let Some((j, line)) = overlay {
                p.line(
                    Line::new(
                        format!("model mode {} (fitted to the stations)", j + 1),
                        line,
                    )
                    .color(warn())
                    .style(LineStyle::dashed_loose()),
                );
            }
            p.line(
                Line::new("measured", pts.clone())
                    .color(accent())
                    .width(3.0),
            );
            p.points(
                Points::new("", pts)
                    .radius(5.0)
                    .color(accent())
                    .filled(true),
            );
        });
}

fn model_plot(
    ui: &mut egui::Ui,
    app: &ViewCtx,
    r: &StudyResult,
    j: usize,
    modal: Option<&crate::modal::ModalResult>,
    test_sel: Option<usize>,
    height: f32,
) {
    let mode = &r.tested.modes[j];
    let test = match (modal, test_sel) {
        (Some(m), Some(k)) => Some((
            m.positions_m.clone(),
            m.modes[k].shape.iter().map(|c| c.re).collect::<Vec<f64>>(),
        )),
        _ => None,
    };
    let (nodes, v) = model_shape(
        r,
        j,
        test.as_ref().map(|(p, s)| (p.as_slice(), s.as_slice())),
    );
    let amp = app.settings.amplitude as f64 * app.ui.phase_rad.cos();
    let line: Vec<[f64; 2]> = nodes.iter().zip(&v).map(|(x, y)| [*x, amp * y]).collect();
    let node_x = super::modes_view::nodes(&nodes, &v);
    ui.label(
        RichText::new(format!(
            "Model mode {} — {:.2} Hz{}",
            j + 1,
            mode.frequency_hz,
            if mode.rigid_body { " (rigid body)" } else { "" }
        ))
        .size(17.0)
        .color(warn()),
    );
    let x1 = nodes.last().copied().unwrap_or(1.0);
    let limit = 1.25 * (app.settings.amplitude as f64).max(0.2);
    shape_plot_frame("model-beside-measured", height, x1, limit)
        .y_axis_label("Timoshenko model, largest = 1")
        .show(ui, |p| {
            p.line(
                Line::new("undeformed", vec![[0.0, 0.0], [x1, 0.0]])
                    .color(idle())
                    .width(5.0),
            );
            p.line(Line::new("model", line).color(warn()).width(3.0));
            p.points(
                Points::new(
                    "nodes",
                    node_x.iter().map(|x| [*x, 0.0]).collect::<Vec<_>>(),
                )
                .shape(MarkerShape::Cross)
                .radius(8.0)
                .color(bad()),
            );
        });
}

fn correlation_table(
    ui: &mut egui::Ui,
    r: &StudyResult,
    test_hz: &[f64],
    test_sel: Option<usize>,
    model_sel: Option<usize>,
    cmds: &mut Vec<Command>,
) {
    ui.label(RichText::new("Test against model").strong());
    if let Some(c) = &r.correlation {
        egui::Grid::new("correlation-grid")
            .striped(true)
            .num_columns(6)
            .show(ui, |ui| {
                for h in [
                    "test",
                    "f test (Hz)",
                    "model",
                    "f model (Hz)",
                    "diff (%)",
                    "MAC",
                ] {
                    ui.label(RichText::new(h).strong());
                }
                ui.end_row();
                let n_test = c.mac.len();
                for k in 0..n_test {
                    let pair = c.pairs.iter().find(|p| p.test == k);
                    if ui
                        .add(egui::Button::selectable(
                            test_sel == Some(k),
                            format!("{}", k + 1),
                        ))
                        .clicked()
                    {
                        cmds.push(Command::SelectMode(k));
                    }
                    match pair {
                        Some(p) => {
                            ui.label(format!("{:.2}", p.test_hz));
                            ui.label(format!("{}", p.model + 1));
                            ui.label(format!("{:.2}", p.model_hz));
                            let dc = if p.difference_pct.abs() <= 5.0 {
                                good()
                            } else {
                                warn()
                            };
                            ui.label(RichText::new(format!("{:+.2}", p.difference_pct)).color(dc));
                            let mc = if p.mac >= 0.9 { good() } else { warn() };
                            ui.label(RichText::new(format!("{:.3}", p.mac)).color(mc));
                        }
                        None => {
                            ui.label(test_hz.get(k).map_or(String::new(), |f| format!("{f:.2}")));
                            ui.label(RichText::new("none").color(bad()));
                            ui.label("");
                            ui.label("");
                            ui.label(RichText::new("unpaired").color(bad()));
                        }
                    }
                    ui.end_row();
                }
            });
        for &j in &r.missed_in_band {
            ui.label(
                RichText::new(format!(
                    "Model mode {} ({:.1} Hz) lies in the tested band but no test mode pairs with \
                     it: missed by the test (a node at the reference or the hits?) or the model \
                     is off there.",
                    j + 1,
                    r.tested.modes[j].frequency_hz
                ))
                .color(warn()),
            );
        }
    } else {
        ui.label("No fitted test modes yet: the model is shown alone.");
    }
    ui.add_space(6.0);
    ui.label(RichText::new("Model modes, as tested").strong());
    ui.horizontal_wrapped(|ui| {
        for (j, m) in r.tested.modes.iter().enumerate() {
            let label = if m.rigid_body {
                format!("{}: rigid", j + 1)
            } else {
                format!("{}: {:.1} Hz", j + 1, m.frequency_hz)
            };
            if ui
                .add(egui::Button::selectable(model_sel == Some(j), label))
                .clicked()
            {
                cmds.push(Command::SelectModelMode(j));
            }
        }
    });
    ui.label(
        RichText::new(format!(
            "Timoshenko beam, {} elements (converged to {:.0e})",
            r.tested.elements,
            r.tested.last_change.max(1e-12)
        ))
        .small(),
    );
}

/// The model columns the heat map shows: flexible modes up to two beyond the tested ones.
fn mac_columns(r: &StudyResult) -> Vec<usize> {
    let n_test = r.correlation.as_ref().map_or(0, |c| c.mac.len());
    let flexible: Vec<usize> = (0..r.tested.modes.len())
        .filter(|&j| !r.tested.modes[j].rigid_body)
        .collect();
    let keep = (n_test + 2).min(flexible.len());
    flexible[..keep].to_vec()
}

/// Width of the MAC panel: 26 px cells and the row labels, at least its title's width.
fn mac_panel_width(r: &StudyResult) -> f32 {
    (34.0 + 26.0 * mac_columns(r).len() as f32 + 8.0).max(230.0)
}

fn mac_panel(
    ui: &mut egui::Ui,
    r: &StudyResult,
    test_sel: Option<usize>,
    model_sel: Option<usize>,
    cmds: &mut Vec<Command>,
) {
    let Some(c) = &r.correlation else {
        return;
    };
    ui.label(RichText::new("MAC, test (rows) × model (columns)").strong());
    let cols_idx = &mac_columns(r);
    let values: Vec<Vec<f64>> = c
        .mac
        .iter()
        .map(|row| cols_idx.iter().map(|&j| row[j]).collect())
        .collect();
    let rows: Vec<String> = (1..=c.mac.len()).map(|k| k.to_string()).collect();
    let cols: Vec<String> = cols_idx.iter().map(|j| (j + 1).to_string()).collect();
    let hl_col = model_sel.and_then(|j| cols_idx.iter().position(|&x| x == j));
    if let Some((i, jj)) = plots::heat_map(ui, &values, &rows, &cols, (test_sel, hl_col)) {
        cmds.push(Command::SelectMode(i));
        cmds.push(Command::SelectModelMode(cols_idx[jj]));
    }
    ui.label(
        RichText::new("Paired modes show a bright cell in their row and column; click to compare.")
            .small(),
    );
}

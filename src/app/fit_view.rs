//! Pole picking: the stabilization diagram over the mode indicator. A click on a pole column takes
//! or drops that mode; the fit band's edges drag; the stable columns are also listed as buttons.

use eframe::egui::{self, RichText};
use egui_plot::{Line, MarkerShape, Points, Span, VLine};

use super::plots::{self, accent, bad, good, idle, warn};
use super::{Command, ViewCtx};
use crate::estimate::lscf::{PoleStatus, Stabilization};
use crate::modal::ModalResult;

/// For each mode of a result, the diagram pole it most likely came from: the best-status,
/// highest-order pole within 1 % (or two lines) of the mode's measured frequency.
pub fn poles_of_modes(m: &ModalResult, stab: &Stabilization) -> Vec<usize> {
    m.modes
        .iter()
        .filter_map(|md| {
            let f = md.measured_frequency_hz;
            best_pole_near(stab, f, (0.01 * f).max(1e-6))
        })
        .collect()
}

/// The best pole within `tol` Hz of `f`: fully stable first, then the highest order, then the
/// nearest.
pub fn best_pole_near(stab: &Stabilization, f: f64, tol: f64) -> Option<usize> {
    stab.poles
        .iter()
        .enumerate()
        .filter(|(_, p)| (p.frequency_hz - f).abs() <= tol)
        .max_by(|(_, a), (_, b)| {
            a.status.cmp(&b.status).then(a.order.cmp(&b.order)).then(
                (b.frequency_hz - f)
                    .abs()
                    .total_cmp(&(a.frequency_hz - f).abs()),
            )
        })
        .map(|(i, _)| i)
}

/// Columns of fully stable poles (frequencies within 1 % of each other), as (mean frequency Hz,
/// poles in the column); those with at least `min_orders` poles.
pub fn stable_columns(stab: &Stabilization, min_orders: usize) -> Vec<(f64, usize)> {
    let mut f: Vec<f64> = stab
        .poles
        .iter()
        .filter(|p| p.status == PoleStatus::FrequencyDampingShape)
        .map(|p| p.frequency_hz)
        .collect();
    f.sort_by(f64::total_cmp);
    let mut cols: Vec<(f64, usize)> = Vec::new();
    let mut group: Vec<f64> = Vec::new();
    for v in f {
        if let Some(&first) = group.first()
            && v - first > 0.01 * first
        {
            cols.push((group.iter().sum::<f64>() / group.len() as f64, group.len()));
            group.clear();
        }
        group.push(v);
    }
    if !group.is_empty() {
        cols.push((group.iter().sum::<f64>() / group.len() as f64, group.len()));
    }
    cols.retain(|c| c.1 >= min_orders);
    cols
}

fn marker(s: PoleStatus) -> (MarkerShape, egui::Color32, f32, &'static str) {
    match s {
        PoleStatus::New => (MarkerShape::Circle, idle(), 1.5, "new"),
        PoleStatus::Frequency => (MarkerShape::Square, warn(), 2.5, "f stable"),
        PoleStatus::FrequencyDamping => (MarkerShape::Diamond, accent(), 3.5, "f, ζ stable"),
        PoleStatus::FrequencyDampingShape => (MarkerShape::Plus, good(), 5.5, "f, ζ, shape stable"),
    }
}

/// Colour of the scaled mode indicator behind the poles: the text colour, faint.
fn indicator_colour(ui: &egui::Ui) -> egui::Color32 {
    ui.visuals().text_color().gamma_multiply(0.45)
}

/// Paints one marker glyph as the plot draws it (the toolkit's legend draws every glyph as a
/// circle).
fn glyph(p: &egui::Painter, c: egui::Pos2, shape: MarkerShape, color: egui::Color32, r: f32) {
    use egui::{Stroke, pos2, vec2};
    let r = r.max(3.0);
    match shape {
        MarkerShape::Circle => {
            p.circle_filled(c, r, color);
        }
        MarkerShape::Square => {
            p.rect_filled(
                egui::Rect::from_center_size(c, vec2(2.0 * r, 2.0 * r) * 0.9),
                0.0,
                color,
            );
        }
        MarkerShape::Diamond => {
            let pts = vec![
                pos2(c.x, c.y - r),
                pos2(c.x + r, c.y),
                pos2(c.x, c.y + r),
                pos2(c.x - r, c.y),
            ];
            p.add(egui::Shape::convex_polygon(pts, color, Stroke::NONE));
        }
        _ => {
            let s = Stroke::new(2.0, color);
            p.line_segment([pos2(c.x - r, c.y), pos2(c.x + r, c.y)], s);
            p.line_segment([pos2(c.x, c.y - r), pos2(c.x, c.y + r)], s);
        }
    }
}

/// The diagram's key, above the plot so it hides no pole: the exact glyphs, what each status
/// means with the tolerances in force, the indicator, the taken modes and the band.
fn key(ui: &mut egui::Ui, c: &crate::estimate::lscf::StabilityCriteria) {
    ui.horizontal_wrapped(|ui| {
        ui.label(RichText::new("Key:").strong());
        for s in [
            PoleStatus::New,
            PoleStatus::Frequency,
            PoleStatus::FrequencyDamping,
            PoleStatus::FrequencyDampingShape,
        ] {
            let (shape, color, radius, name) = marker(s);
            let (r, p) = ui.allocate_painter(egui::vec2(14.0, 14.0), egui::Sense::hover());
            glyph(&p, r.rect.center(), shape, color, radius);
            ui.label(name);
        }
        ui.label(
            RichText::new(format!(
                "(against the next lower order: f within {:.1} %, ζ within {:.0} %, shape MAC ≥ {:.2})",
                c.frequency * 100.0,
                c.damping * 100.0,
                c.mac
            ))
            .small(),
        );
        let (r, p) = ui.allocate_painter(egui::vec2(22.0, 14.0), egui::Sense::hover());
        let ic = indicator_colour(ui);
        p.line_segment(
            [r.rect.left_center(), r.rect.right_center()],
            egui::Stroke::new(1.5, ic),
        );
        ui.label("mode indicator");
        let (r, p) = ui.allocate_painter(egui::vec2(10.0, 16.0), egui::Sense::hover());
        p.line_segment(
            [r.rect.center_top(), r.rect.center_bottom()],
            egui::Stroke::new(2.0, bad()),
        );
        ui.label("taken as a mode");
        let (r, p) = ui.allocate_painter(egui::vec2(18.0, 14.0), egui::Sense::hover());
        p.rect_filled(r.rect, 0.0, accent().gamma_multiply(0.15));
        ui.label("fit band");
    });
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let Some(doc) = app.doc else {
        return;
    };
    let Some(frfs) = doc.frfs.clone() else {
        ui.label("No FRF to fit yet.");
        return;
    };
    let Some(m) = doc.modal.clone() else {
        ui.label(doc.modal_error.clone().unwrap_or_else(|| "Fitting…".into()));
        return;
    };
    let Some(stab) = m.stabilization.clone() else {
        ui.label(
            "This test was fitted by the peak method (roving-sensor layout or chosen in the setup): \
             there is no stabilization diagram. The modes are in the mode-shape view.",
        );
        return;
    };
    let full = [
        frfs.freq_hz.first().copied().unwrap_or(0.0),
        frfs.freq_hz.last().copied().unwrap_or(1.0),
    ];
    let band = doc.modal_settings.band_hz.unwrap_or(full);
    let min_orders = doc.modal_settings.min_stable_orders;
    // A choice restored from the session (or kept over a re-analysis) is the person's too.
    let manual = doc.picked.is_some()
        || matches!(
            doc.modal_settings.selection,
            crate::modal::Selection::Near(_)
        );
    let picked = doc
        .picked
        .clone()
        .unwrap_or_else(|| poles_of_modes(&m, &stab));
    let picked_f: Vec<f64> = picked
        .iter()
        .filter_map(|&i| stab.poles.get(i))
        .map(|p| p.frequency_hz)
        .collect();
    let mut cmds = Vec::new();

    ui.horizontal_wrapped(|ui| {
        ui.heading("Pole picking");
        ui.label(if manual {
            "modes chosen by you"
        } else {
            "modes chosen automatically"
        });
        if ui
            .add_enabled(manual, egui::Button::new("Automatic choice"))
            .clicked()
        {
            cmds.push(Command::AutoPoles);
        }
        ui.separator();
        let mut edit = app.ui.fit_band_edit.unwrap_or(band);
        ui.label("fit band");
        let lo = ui.add(
            egui::DragValue::new(&mut edit[0])
                .range(full[0]..=full[1])
                .suffix(" Hz")
                .speed(1.0),
        );
        ui.label("to");
        let hi = ui.add(
            egui::DragValue::new(&mut edit[1])
                .range(full[0]..=full[1])
                .suffix(" Hz")
                .speed(1.0),
        );
        if lo.changed() || hi.changed() {
            app.ui.fit_band_edit = Some(edit);
        }
        if (lo.drag_stopped() || lo.lost_focus() || hi.drag_stopped() || hi.lost_focus())
            && edit != band
            && edit[1] > edit[0]
        {
            cmds.push(Command::SetFitBand(Some(edit)));
            app.ui.fit_band_edit = None;
        }
        if ui
            .add_enabled(
                doc.modal_settings.band_hz.is_some(),
                egui::Button::new("Whole band"),
            )
            .clicked()
        {
            cmds.push(Command::SetFitBand(None));
            app.ui.fit_band_edit = None;
        }
    });
    ui.label(
        "Click a pole column to take or drop that mode; drag a band edge (dashed) to change the fit band. \
         Frequencies as measured (with the exponential window).",
    );
    let max_order = stab.max_order.max(1) as f64;
    let ind = &m.indicators;
    let vals: Vec<f64> = if frfs.layout == crate::setup::Layout::Hammer {
        ind.sum_abs.iter().map(|v| plots::db(*v)).collect()
    } else {
        ind.sum_response_autospectra
            .iter()
            .map(|v| 10.0 * v.max(1e-300).log10())
            .collect()
    };
    let (vmin, vmax) = vals
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(*v), b.max(*v))
        });
    let span = (vmax - vmin).max(1e-9);
    let scaled: Vec<[f64; 2]> = ind
        .freq_hz
        .iter()
        .zip(&vals)
        .map(|(f, v)| [*f, (v - vmin) / span * max_order])
        .collect();
    let mut groups: [Vec<[f64; 2]>; 4] = Default::default();
    for p in &stab.poles {
        groups[p.status as usize].push([p.frequency_hz, p.order as f64]);
    }
    let live_band = app.ui.fit_band_edit.unwrap_or(band);
    key(ui, &doc.modal_settings.criteria);
    let ic = indicator_colour(ui);
    let h = (ui.available_height() - 90.0).max(200.0);
    let r = plots::plot("stabilization")
        .height(h)
        .allow_drag(false)
        .allow_double_click_reset(true)
        .x_axis_label("frequency (Hz)")
        .y_axis_label("model order")
        .include_y(0.0)
        .include_y(max_order + 1.0)
        .show(ui, |p| {
            p.line(Line::new("mode indicator (scaled)", scaled).color(ic));
            let statuses = [
                PoleStatus::New,
                PoleStatus::Frequency,
                PoleStatus::FrequencyDamping,
                PoleStatus::FrequencyDampingShape,
            ];
            for (s, pts) in statuses.into_iter().zip(groups) {
                let (shape, color, radius, name) = marker(s);
                p.points(
                    Points::new(name, pts)
                        .shape(shape)
                        .color(color)
                        .radius(radius),
                );
            }
            for f in &picked_f {
                p.vline(VLine::new("taken as a mode", *f).color(bad()).width(1.5));
            }
            p.span(
                Span::new("", live_band[0]..=live_band[1])
                    .fill(accent().gamma_multiply(0.15))
                    .border_style(egui_plot::LineStyle::dashed_loose()),
            );
        });
    // Band edges drag; a click elsewhere toggles the column under the pointer.
    let resp = &r.response;
    let tr = &r.transform;
    let drag_id = egui::Id::unique("fit-band-edge");
    if let Some(pos) = resp.interact_pointer_pos().or(resp.hover_pos()) {
        let x = tr.value_from_position(pos).x;
        let px_per_hz = tr.dpos_dvalue_x().abs().max(1e-12);
        if resp.drag_started() {
            // Judged where the button went down: a fast drag has left the edge by the time the
            // toolkit calls it a drag.
            let x = ui
                .input(|i| i.pointer.press_origin())
                .map_or(x, |o| tr.value_from_position(o).x);
            let near = |e: f64| ((e - x) * px_per_hz).abs() < 10.0;
            let edge = if near(live_band[0]) {
                Some(0usize)
            } else if near(live_band[1]) {
                Some(1)
            } else {
                None
            };
            ui.ctx().data_mut(|d| d.insert_temp(drag_id, edge));
        }
        let edge: Option<usize> = ui.ctx().data(|d| d.get_temp(drag_id)).flatten();
        if let Some(e) = edge {
            if resp.dragged() {
                let mut b = live_band;
                b[e] = x.clamp(full[0], full[1]);
                app.ui.fit_band_edit = Some(b);
            }
            if resp.drag_stopped() {
                ui.ctx()
                    .data_mut(|d| d.insert_temp::<Option<usize>>(drag_id, None));
                if let Some(b) = app.ui.fit_band_edit.take()
                    && b[1] > b[0]
                {
                    cmds.push(Command::SetFitBand(Some(b)));
                }
            }
        } else if resp.clicked() {
            cmds.push(Command::TogglePole {
                frequency_hz: x,
                tolerance_hz: 8.0 / px_per_hz,
            });
        }
    }
    // The stable columns as buttons (keyboard and screen-reader friendly).
    ui.horizontal_wrapped(|ui| {
        ui.label(RichText::new("Stable columns:").strong());
        for (f, n) in stable_columns(&stab, min_orders) {
            let taken = picked_f.iter().any(|p| (p - f).abs() <= 0.01 * f);
            let text = if taken {
                format!("drop {f:.1} Hz")
            } else {
                format!("take {f:.1} Hz")
            };
            let button = if taken {
                egui::Button::new(RichText::new(text).color(egui::Color32::WHITE)).fill(good())
            } else {
                egui::Button::new(text)
            };
            if ui
                .add(button)
                .on_hover_text(format!("{n} fully stable poles in this column"))
                .clicked()
            {
                cmds.push(Command::TogglePole {
                    frequency_hz: f,
                    tolerance_hz: 0.01 * f,
                });
            }
        }
    });
    for c in cmds {
        app.push(c);
    }
}

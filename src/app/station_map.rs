//! The station map: the part drawn to scale with one cell per station, coloured by its state.

use eframe::egui::{self, Align2, Color32, FontId, Rect, RichText, Sense, Stroke, pos2, vec2};

use super::plots::{accent, bad, good, idle, warn};
use super::{Command, Document, View, ViewCtx};

/// A station's state at a glance.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StationState {
    /// No recording yet.
    NotMeasured,
    /// Recorded; its analysis has not come back yet.
    Analysing,
    /// Every hit accepted.
    Good,
    /// An FRF, but some hits were rejected or overridden.
    Partly,
    /// No usable FRF.
    Problem,
}

impl StationState {
    /// Cell colour.
    pub fn color(self) -> Color32 {
        match self {
            StationState::NotMeasured => idle(),
            StationState::Analysing => accent().gamma_multiply(0.45),
            StationState::Good => good(),
            StationState::Partly => warn(),
            StationState::Problem => bad(),
        }
    }

    /// Word for the legend.
    pub fn word(self) -> &'static str {
        match self {
            StationState::NotMeasured => "not measured",
            StationState::Analysing => "being analysed",
            StationState::Good => "all hits accepted",
            StationState::Partly => "some hits rejected",
            StationState::Problem => "no usable FRF",
        }
    }
}

/// The state of a station and a sentence for its hover text.
pub fn state_of(doc: &Document, station: u32) -> (StationState, String) {
    let Some(sa) = doc.station_analysis(station) else {
        let (state, why) = if doc.station_index(station).is_some() {
            if doc.analysis_error.is_some() {
                (
                    StationState::Problem,
                    "analysis failed (see the message bar)",
                )
            } else {
                (StationState::Analysing, "being analysed")
            }
        } else {
            (StationState::NotMeasured, "no recording yet")
        };
        return (state, format!("Station {station}: {why}"));
    };
    let hits = &sa.result.hits;
    let accepted = hits.iter().filter(|h| h.accepted).count();
    let mut lines = vec![format!(
        "Station {station} at {:.3} m: {accepted} of {} hits accepted",
        sa.position_m,
        hits.len()
    )];
    for h in hits {
        let verdict = if h.accepted { "kept" } else { "rejected" };
        let why: Vec<&str> = h.reasons.iter().map(|r| r.sentence()).collect();
        let by = match h.override_accept {
            Some(_) => " (by a person)",
            None => "",
        };
        if why.is_empty() {
            lines.push(format!("  hit {}: {verdict}{by}", h.index + 1));
        } else {
            lines.push(format!(
                "  hit {}: {verdict}{by} — {}",
                h.index + 1,
                why.join("; ")
            ));
        }
    }
    // A hit a person kept counts as kept: every hit accepted is a good station, whoever decided.
    let state = if accepted == 0 {
        StationState::Problem
    } else if accepted < hits.len() {
        StationState::Partly
    } else {
        StationState::Good
    };
    (state, lines.join("\n"))
}

/// All stations known to the document: recorded ones and those defined without a recording.
fn all_stations(doc: &Document) -> Vec<(u32, f64)> {
    let mut v: Vec<(u32, f64)> = doc
        .data
        .stations
        .iter()
        .map(|s| (s.station, s.position_m))
        .collect();
    if let Some(s) = &doc.session {
        for st in &s.manifest.stations {
            if !v.iter().any(|(n, _)| *n == st.station) {
                v.push((st.station, st.position_m));
            }
        }
    }
    v.sort_by(|a, b| a.1.total_cmp(&b.1).then(a.0.cmp(&b.0)));
    v
}

/// Draws the part with its station cells in a strip of the given height; clicking a cell
/// pushes [`Command::GoStation`].
pub fn strip(ui: &mut egui::Ui, app: &mut ViewCtx, height: f32) {
    let Some(doc) = app.doc else {
        return;
    };
    let stations = all_stations(doc);
    let width = ui.available_width();
    let (rect, _) = ui.allocate_exact_size(vec2(width, height), Sense::hover());
    let painter = ui.painter_at(rect);
    let visuals = ui.visuals().clone();
    // With a shaft model the part is drawn as its stepped sections, to the same scale as the
    // stations; without one, as a plain bar between the end stations.
    let sections: Vec<(f64, f64, f64)> = doc
        .study
        .as_ref()
        .map(|st| {
            let mut x = 0.0;
            st.shaft
                .sections
                .iter()
                .map(|sec| {
                    let a = x;
                    x += sec.length_m;
                    (a, x, sec.outer_diameter_m)
                })
                .collect()
        })
        .unwrap_or_default();
    let (x_min, x_max) = stations
        .iter()
        .map(|s| s.1)
        .chain(sections.iter().flat_map(|s| [s.0, s.1]))
        .fold((0.0f64, 0.0f64), |(lo, hi), x| (lo.min(x), hi.max(x)));
    let length = (x_max - x_min).max(1e-3);
    let margin = 64.0;
    let to_x =
        |p: f64| rect.left() + margin + ((p - x_min) / length) as f32 * (width - 2.0 * margin);
    let spacing_px = if stations.len() > 1 {
        (width - 2.0 * margin) / (stations.len() - 1) as f32
    } else {
        60.0
    };
    let cell = (spacing_px * 0.8).clamp(14.0, (height * 0.42).min(46.0));
    let shaft_y = rect.top() + height * 0.68;
    let shaft_h = (height * 0.10).clamp(6.0, 18.0);
    // The part, to scale along its length (diameters to the strip's own scale).
    let fill = visuals.widgets.inactive.bg_fill;
    let outline = egui::Stroke::new(1.0, visuals.widgets.noninteractive.bg_stroke.color);
    let d_max = sections.iter().map(|s| s.2).fold(0.0f64, f64::max);
    let h_max = (height * 0.22).clamp(10.0, 30.0);
    let body_half = if d_max > 0.0 {
        h_max / 2.0
    } else {
        shaft_h / 2.0
    };
    if d_max > 0.0 {
        for &(a, b, d) in &sections {
            let h = (h_max * (d / d_max) as f32).max(3.0);
            let r = Rect::from_min_max(
                pos2(to_x(a), shaft_y - h / 2.0),
                pos2(to_x(b), shaft_y + h / 2.0),
            );
            painter.rect_filled(r, 0.0, fill);
            painter.rect_stroke(r, 0.0, outline, egui::StrokeKind::Inside);
        }
    } else {
        painter.rect_filled(
            Rect::from_min_max(
                pos2(to_x(x_min), shaft_y - shaft_h / 2.0),
                pos2(to_x(x_max), shaft_y + shaft_h / 2.0),
            ),
            3.0,
            fill,
        );
    }
    let text = visuals.text_color();
    let small = FontId::proportional((cell * 0.45).clamp(11.0, 16.0));
    let reference = doc.setup.reference_station;
    let current = app.ui.current_station;
    let mut clicked = None;
    // While capturing, a station is done when it holds the planned number of kept hits: fewer
    // kept is not yet good, however clean they are.
    let planned = (app.settings.view == View::Capture).then_some(app.settings.hits_per_station);
    for &(st, pos) in &stations {
        let x = to_x(pos);
        let (mut state, mut hover) = state_of(doc, st);
        if let (Some(n), StationState::Good) = (planned, state) {
            let kept = doc
                .station_analysis(st)
                .map_or(0, |a| a.result.hits.iter().filter(|h| h.accepted).count());
            if kept < n {
                state = StationState::Partly;
                hover.push_str(&format!("\n{kept} of {n} planned hits kept so far"));
            }
        }
        let c = Rect::from_center_size(
            pos2(x, shaft_y - shaft_h / 2.0 - 8.0 - cell / 2.0),
            vec2(cell, cell),
        );
        painter.line_segment(
            [pos2(x, c.bottom()), pos2(x, shaft_y - shaft_h / 2.0)],
            Stroke::new(1.5, state.color()),
        );
        painter.rect_filled(c, 4.0, state.color());
        if current == Some(st) {
            painter.rect_stroke(
                c.expand(3.0),
                5.0,
                Stroke::new(3.0, accent()),
                egui::StrokeKind::Outside,
            );
        }
        painter.text(
            c.center(),
            Align2::CENTER_CENTER,
            st.to_string(),
            small.clone(),
            // The light theme's cell colours are dark enough for text; the dark theme's are not.
            if super::plots::is_dark() {
                Color32::BLACK
            } else {
                Color32::WHITE
            },
        );
        if Some(st) == reference {
            painter.text(
                pos2(x, shaft_y + body_half + 4.0),
                Align2::CENTER_TOP,
                "ref",
                small.clone(),
                text,
            );
        }
        let id = ui.scope_id().with(("station-cell", st));
        let r = ui.interact(c, id, Sense::click());
        r.widget_info(|| {
            egui::WidgetInfo::labeled(egui::Role::Button, true, format!("Station {st}"))
        });
        if r.clicked() {
            clicked = Some(st);
        }
        r.on_hover_text(hover);
    }
    // Length scale at the ends of the part.
    let y = shaft_y;
    painter.text(
        pos2(to_x(x_min) - 10.0, y),
        Align2::RIGHT_CENTER,
        format!("{x_min:.2} m"),
        FontId::proportional(12.0),
        text,
    );
    painter.text(
        pos2(to_x(x_max) + 10.0, y),
        Align2::LEFT_CENTER,
        format!("{x_max:.2} m"),
        FontId::proportional(12.0),
        text,
    );
    if let Some(st) = clicked {
        app.push(Command::GoStation(st));
    }
}

/// The station map view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let Some(doc) = app.doc else {
        return;
    };
    let recorded = doc.data.stations.len();
    let good = doc
        .data
        .stations
        .iter()
        .filter(|s| state_of(doc, s.station).0 == StationState::Good)
        .count();
    ui.heading(format!("{} — station map", doc.part.name));
    ui.label(format!(
        "{recorded} stations recorded, {good} with every hit accepted. Click a station to select it; \
         hover for its hits."
    ));
    // What the analysis found about the test as a whole (usable band, record length chosen,
    // a layout that looks wrong, stations left out), as the summary and the report say it.
    let mut switch_layout = false;
    if let Some(a) = &doc.analysis {
        for w in a.warnings() {
            ui.label(RichText::new(&w).color(warn()));
            if w.contains("sensor layout")
                && doc.setup.layout == crate::setup::Layout::Hammer
                && ui
                    .button("Analyse as a roving-accelerometer test")
                    .clicked()
            {
                switch_layout = true;
            }
        }
    }
    ui.horizontal(|ui| {
        for s in [
            StationState::NotMeasured,
            StationState::Analysing,
            StationState::Good,
            StationState::Partly,
            StationState::Problem,
        ] {
            let (r, p) = ui.allocate_painter(vec2(16.0, 16.0), Sense::hover());
            p.rect_filled(r.rect, 3.0, s.color());
            ui.label(s.word());
        }
    });
    if switch_layout {
        app.push(Command::UseLayout(crate::setup::Layout::Sensor));
    }
    ui.add_space(8.0);
    let h = (ui.available_height() * 0.45).clamp(120.0, 260.0);
    strip(ui, app, h);
    ui.add_space(8.0);
    let Some(st) = app.ui.current_station else {
        return;
    };
    let Some(doc) = app.doc else {
        return;
    };
    let (state, hover) = state_of(doc, st);
    let mut go = None;
    ui.horizontal_top(|ui| {
        ui.group(|ui| {
            ui.set_width(360.0);
            ui.vertical(|ui| {
                ui.label(
                    egui::RichText::new(format!("Station {st}: {}", state.word()))
                        .size(20.0)
                        .color(state.color()),
                );
                for line in hover.lines().skip(1) {
                    ui.label(line.trim());
                }
                ui.horizontal(|ui| {
                    if ui.button("Check its hits").clicked() {
                        go = Some(View::Hits);
                    }
                    if ui.button("Review its FRF").clicked() {
                        go = Some(View::Frf);
                    }
                });
            });
        });
        thumbnail(ui, app, doc, st);
    });
    if let Some(v) = go {
        app.push(Command::Show(v));
    }
}

/// The selected station's FRF magnitude and coherence, small, with the modes found marked: what
/// the station gave at a glance without leaving the map.
fn thumbnail(ui: &mut egui::Ui, app: &mut ViewCtx, doc: &Document, st: u32) {
    let Some(frfs) = &doc.frfs else {
        return;
    };
    let Some(i) = frfs.stations.iter().position(|&s| s == st) else {
        ui.label("No FRF at this station (no accepted hit).");
        return;
    };
    let axis = super::plots::FreqAxis {
        log: app.settings.log_frequency,
    };
    let f = &frfs.freq_hz;
    let columns = (ui.available_width() as usize).max(16);
    let unit = match frfs.layout {
        crate::setup::Layout::Hammer => "accelerance\ndB re 1 (m/s²)/N",
        crate::setup::Layout::Sensor => "transmissibility\ndB re 1",
    };
    let mag = app.ui.plot_scratch.reduced(
        f,
        |k| super::plots::db(frfs.h[i][k].norm()),
        axis,
        None,
        columns,
    );
    let coh = app
        .ui
        .plot_scratch
        .reduced(f, |k| frfs.coherence[i][k], axis, None, columns);
    let modes: Vec<f64> = doc
        .modal
        .as_ref()
        .map(|m| m.modes.iter().map(|md| md.measured_frequency_hz).collect())
        .unwrap_or_default();
    let h = (ui.available_height() - 20.0).clamp(120.0, 320.0);
    ui.vertical(|ui| {
        let draw_modes = |p: &mut egui_plot::PlotUi<'_>| {
            for &fm in &modes {
                p.vline(
                    egui_plot::VLine::new("mode", axis.x(fm)).color(warn().gamma_multiply(0.6)),
                );
            }
        };
        axis.configure(super::plots::plot("map-thumb-mag"))
            .height(h * 0.68)
            .y_axis_label(unit)
            .y_axis_min_width(56.0)
            .allow_drag(false)
            .allow_zoom(false)
            .allow_scroll(false)
            .show(ui, |p| {
                p.line(egui_plot::Line::new(format!("station {st}"), mag).color(accent()));
                draw_modes(p);
            });
        axis.configure(super::plots::plot("map-thumb-coh"))
            .height(h * 0.32)
            .include_y(0.0)
            .include_y(1.05)
            .y_axis_label("coherence\nγ²")
            .y_axis_min_width(56.0)
            .allow_drag(false)
            .allow_zoom(false)
            .allow_scroll(false)
            .show(ui, |p| {
                p.line(egui_plot::Line::new(format!("station {st}"), coh).color(accent()));
                draw_modes(p);
            });
    });
}

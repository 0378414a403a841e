//! The test plan in the setup view: from the shaft model (or a uniform estimate) and the band,
//! the modes to expect with their nodes, the stations needed, where the reference may go, where
//! to hang the part, the tip and the record length — drawn on the part with the planned and the
//! actual station grid. Planned on a thread of its own when its inputs change.

use eframe::egui::{self, RichText};
use egui_plot::{Line, MarkerShape, Points, Polygon};

use super::plots::{self, accent, bad, good, warn};
use super::{TapgridApp, View, ViewCtx};
use crate::model::beam::{Material, Section, Shaft};
use crate::model::plan::{PlanOptions, TestPlan, plan};

/// The last plan and the one being made.
pub type PlanState = super::background::Background<TestPlan>;

/// The panel's choices.
#[derive(Debug, Clone, PartialEq)]
pub struct PlanEdit {
    /// Band, Hz (`None`: the setup's band).
    pub band_hz: Option<[f64; 2]>,
    /// Damping ratio expected.
    pub damping_ratio: f64,
    /// Stations planned (`None`: as many as the test has, else the plan's count).
    pub stations: Option<usize>,
    /// A uniform estimate when there is no shaft model: length and diameter, m.
    pub uniform_m: [f64; 2],
}

impl Default for PlanEdit {
    fn default() -> Self {
        Self {
            band_hz: None,
            damping_ratio: 0.002,
            stations: None,
            uniform_m: [0.0, 0.04],
        }
    }
}

/// What the plan is made from, for the key and the job.
fn inputs(app: &TapgridApp) -> Option<(Shaft, PlanOptions, bool)> {
    let d = app.doc.as_ref()?;
    let rate = d.analysis.as_ref().map_or(51_200, |a| a.sample_rate_hz);
    let band = app.ui.plan.band_hz.unwrap_or_else(|| d.setup.band(rate));
    let (shaft, from_model) = match &d.study {
        Some(st) => (st.shaft.clone(), true),
        None => {
            let span = d
                .data
                .stations
                .iter()
                .map(|s| s.position_m)
                .fold(0.0f64, f64::max);
            let [l, dia] = app.ui.plan.uniform_m;
            let length = if l > 0.0 { l } else { span.max(0.1) };
            (
                Shaft {
                    material: Material::STEEL,
                    sections: vec![Section {
                        length_m: length,
                        outer_diameter_m: dia,
                        inner_diameter_m: 0.0,
                        material: None,
                    }],
                    discs: Vec::new(),
                    supports: Vec::new(),
                },
                false,
            )
        }
    };
    let stations = app.ui.plan.stations.or_else(|| {
        let n = d.data.stations.len();
        (n >= 2).then_some(n)
    });
    Some((
        shaft,
        PlanOptions {
            band_hz: band,
            stations,
            damping_ratio: app.ui.plan.damping_ratio,
            sample_rate_hz: f64::from(rate).max(2.0 * band[1]),
            ..PlanOptions::default()
        },
        from_model,
    ))
}

impl TapgridApp {
    /// Plans when the setup view is shown and the inputs changed (called from `logic`).
    pub(crate) fn poll_plan(&mut self, ctx: &egui::Context) {
        self.plan.collect(ctx);
        if self.settings.view != View::Setup {
            return;
        }
        let Some((shaft, options, _)) = inputs(self) else {
            return;
        };
        let key = format!(
            "{}|{options:?}",
            serde_json::to_string(&shaft).unwrap_or_default()
        );
        self.plan
            .start_for(key, "tapgrid-plan", move || plan(&shaft, &options));
    }

    /// Whether a plan is being made.
    pub fn plan_busy(&self) -> bool {
        self.plan.busy()
    }
}

/// Draws the panel.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let Some(doc) = app.doc else {
        return;
    };
    egui::CollapsingHeader::new(RichText::new("Test plan").strong())
        .id_salt("test-plan")
        .default_open(true)
        .show(ui, |ui| {
            let from_model = doc.study.is_some();
            ui.label(if from_model {
                "From the shaft model (Shaft model view)."
            } else {
                "No shaft model: a uniform steel rod estimate."
            });
            let e = &mut app.ui.plan;
            ui.horizontal_wrapped(|ui| {
                let rate = doc.analysis.as_ref().map_or(51_200, |a| a.sample_rate_hz);
                let mut band = e.band_hz.unwrap_or_else(|| doc.setup.band(rate));
                ui.label("band");
                let a = ui.add(
                    egui::DragValue::new(&mut band[0])
                        .range(0.0..=1e5)
                        .speed(1.0)
                        .suffix(" Hz"),
                );
                ui.label("to");
                let b = ui.add(
                    egui::DragValue::new(&mut band[1])
                        .range(1.0..=1e5)
                        .speed(5.0)
                        .suffix(" Hz"),
                );
                if (a.changed() || b.changed()) && band[1] > band[0] {
                    e.band_hz = Some(band);
                }
                ui.label("damping ratio");
                ui.add(
                    egui::DragValue::new(&mut e.damping_ratio)
                        .range(1e-5..=0.2)
                        .speed(0.0001)
                        .max_decimals(5),
                );
                ui.label("stations");
                let mut n = e.stations.unwrap_or(doc.data.stations.len().max(2));
                if ui
                    .add(egui::DragValue::new(&mut n).range(2..=200))
                    .changed()
                {
                    e.stations = Some(n);
                }
                if !from_model {
                    ui.label("length");
                    ui.add(
                        egui::DragValue::new(&mut e.uniform_m[0])
                            .range(0.0..=20.0)
                            .speed(0.005)
                            .suffix(" m"),
                    )
                    .on_hover_text("0: the span of the stations");
                    ui.label("diameter");
                    ui.add(
                        egui::DragValue::new(&mut e.uniform_m[1])
                            .range(0.002..=2.0)
                            .speed(0.001)
                            .suffix(" m"),
                    );
                }
            });
            match app.plan.result.as_ref().map(|r| &r.1) {
                None => {
                    ui.label("Planning…");
                }
                Some(Err(e)) => {
                    ui.label(RichText::new(e).color(bad()));
                }
                Some(Ok(p)) => {
                    let actual: Vec<f64> = doc.data.stations.iter().map(|s| s.position_m).collect();
                    drawing(ui, p, &actual);
                    summary(ui, p);
                }
            }
            ui.label(RichText::new(crate::cautions::PLAN).color(warn()).small());
        });
}

/// The part as a bar with the avoided stretches (red), the planned grid (ticks above), the
/// test's stations (dots below), every in-band mode's nodes (small marks, one row per mode),
/// the suspension points (triangles) and the best reference places (diamonds).
fn drawing(ui: &mut egui::Ui, p: &TestPlan, actual: &[f64]) {
    let rows = p.modes.len() as f64;
    plots::plot("plan-drawing")
        .height(90.0 + 14.0 * rows as f32)
        .include_x(-0.1 * p.length_m)
        .include_x(1.02 * p.length_m)
        .show_y(false)
        .show_axes([true, false])
        .allow_drag(false)
        .allow_zoom(false)
        .allow_scroll(false)
        .x_axis_label("position along the part (m)")
        .show(ui, |pu| {
            let l = p.length_m;
            for (k, r) in p.reference.avoid_m.iter().enumerate() {
                pu.polygon(
                    Polygon::new(
                        format!("near a node ({k})"),
                        vec![[r[0], -0.2], [r[1], -0.2], [r[1], 0.2], [r[0], 0.2]],
                    )
                    .fill_color(bad().gamma_multiply(0.25))
                    .stroke(egui::Stroke::NONE),
                );
            }
            pu.line(
                Line::new("part", vec![[0.0, 0.0], [l, 0.0]])
                    .color(plots::idle())
                    .width(6.0),
            );
            pu.points(
                Points::new(
                    "planned stations",
                    p.stations
                        .positions_m
                        .iter()
                        .map(|&x| [x, 0.45])
                        .collect::<Vec<_>>(),
                )
                .shape(MarkerShape::Down)
                .radius(4.0)
                .color(accent()),
            );
            if !actual.is_empty() {
                pu.points(
                    Points::new(
                        "this test's stations",
                        actual.iter().map(|&x| [x, -0.45]).collect::<Vec<_>>(),
                    )
                    .shape(MarkerShape::Circle)
                    .radius(3.0)
                    .color(good()),
                );
            }
            for (k, m) in p.modes.iter().enumerate() {
                let y = -0.9 - 0.35 * k as f64;
                pu.points(
                    Points::new(
                        format!("mode {} nodes ({:.0} Hz)", m.number, m.frequency_hz),
                        m.nodes_m.iter().map(|&x| [x, y]).collect::<Vec<_>>(),
                    )
                    .shape(MarkerShape::Cross)
                    .radius(4.0)
                    .color(plots::trace_color(k)),
                );
                pu.text(
                    egui_plot::Text::new(
                        format!("mode {} label", m.number),
                        egui_plot::PlotPoint::new(-0.01 * l, y),
                        RichText::new(format!("{:.0} Hz", m.frequency_hz))
                            .small()
                            .color(plots::trace_color(k)),
                    )
                    .anchor(egui::Align2::RIGHT_CENTER),
                );
            }
            if !p.suspension_m.is_empty() {
                pu.points(
                    Points::new(
                        "suspension",
                        p.suspension_m.iter().map(|&x| [x, 0.9]).collect::<Vec<_>>(),
                    )
                    .shape(MarkerShape::Up)
                    .radius(6.0)
                    .color(warn()),
                );
            }
            pu.points(
                Points::new(
                    "best reference",
                    p.reference
                        .best_m
                        .iter()
                        .map(|&x| [x, 0.0])
                        .collect::<Vec<_>>(),
                )
                .shape(MarkerShape::Diamond)
                .radius(6.0)
                .color(good()),
            );
        });
    ui.label(
        RichText::new(
            "Blue ticks: the planned grid; green dots: this test's stations; crosses: nodes of \
             each mode in the band (one row per mode); red: too near a node for the reference; \
             diamonds: the best reference places; triangles: where to hang a free part.",
        )
        .small(),
    );
}

fn summary(ui: &mut egui::Ui, p: &TestPlan) {
    let modes: Vec<String> = p
        .modes
        .iter()
        .map(|m| format!("{:.0}", m.frequency_hz))
        .collect();
    ui.label(format!(
        "Modes in the band: {} Hz{}",
        if modes.is_empty() {
            "none".to_string()
        } else {
            modes.join(", ")
        },
        p.next_above_hz
            .map_or(String::new(), |f| format!(" (next {f:.0} Hz)"))
    ));
    let st = &p.stations;
    ui.label(format!(
        "Stations: {} give an auto-MAC of at most {:.2} off the diagonal; at least {} keep the \
         modes apart, {} draw every shape between its nodes.",
        st.count, st.max_off_diagonal_mac, st.minimum_count, st.recommended_count
    ));
    let best: Vec<String> = p
        .reference
        .best_m
        .iter()
        .map(|x| format!("{x:.3} m"))
        .collect();
    ui.label(format!("Reference: best at {}.", best.join(", ")));
    if !p.suspension_m.is_empty() {
        let at: Vec<String> = p.suspension_m.iter().map(|x| format!("{x:.3}")).collect();
        ui.label(format!("Hang it at {} m.", at.join(" and ")));
    }
    ui.label(format!("Hammer: {}.", p.hammer.advice));
    ui.label(format!(
        "Record: at least {:.2} s; taps at least {:.1} s apart.",
        p.record.length_s, p.record.tap_spacing_s
    ));
    for w in &p.warnings {
        ui.label(RichText::new(w).color(warn()));
    }
}

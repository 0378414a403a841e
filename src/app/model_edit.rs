//! Editors for the shaft model (sections, discs, bench supports) and its service questions
//! (bearings, running speed, margin rule). Lengths are edited in mm, stored in m.

use eframe::egui::{self, DragValue, RichText};

use super::Document;
use super::plots::warn;
use crate::model::beam::{Disc, Material, Section, Shaft, Support};
use crate::model::margin::MarginRule;
use crate::model::study::Study;

/// Diameter of the first model when nothing is known, m (a small pump or fan shaft).
const FIRST_DIAMETER_M: f64 = 0.05;

/// A first model for a test: a uniform steel shaft from 0 to the last station (1 m without
/// stations), free-free, to be edited into the real part.
pub fn first_model(d: &Document) -> Study {
    let length = d
        .data
        .stations
        .iter()
        .map(|s| s.position_m)
        .fold(0.0f64, f64::max);
    let length = if length > 0.0 { length } else { 1.0 };
    Study::new(Shaft {
        material: Material::STEEL,
        sections: vec![Section {
            length_m: length,
            outer_diameter_m: FIRST_DIAMETER_M,
            inner_diameter_m: 0.0,
            material: None,
        }],
        discs: Vec::new(),
        supports: Vec::new(),
    })
}

fn mm(ui: &mut egui::Ui, v: &mut f64, max_m: f64) -> bool {
    let mut x = *v * 1e3;
    let r = ui.add(
        DragValue::new(&mut x)
            .speed(0.5)
            .range(0.0..=max_m * 1e3)
            .max_decimals(2)
            .suffix(" mm"),
    );
    if r.changed() {
        *v = x * 1e-3;
    }
    r.changed()
}

/// A positive quantity over many decades, shown in engineering notation; drag speed follows
/// its size.
fn sci(ui: &mut egui::Ui, v: &mut f64, suffix: &str) -> bool {
    let speed = (v.abs() * 0.01).max(1e-9);
    ui.add(
        DragValue::new(v)
            .speed(speed)
            .range(0.0..=1e15)
            .custom_formatter(|n, _| {
                if n == 0.0 {
                    "0".to_string()
                } else {
                    format!("{n:.3e}")
                }
            })
            .custom_parser(|s| s.trim().parse::<f64>().ok())
            .suffix(suffix),
    )
    .changed()
}

fn plain(ui: &mut egui::Ui, v: &mut f64, range: std::ops::RangeInclusive<f64>, speed: f64) -> bool {
    ui.add(DragValue::new(v).speed(speed).range(range).max_decimals(3))
        .changed()
}

/// The shaft as tested; true when something changed.
pub fn shaft_editor(ui: &mut egui::Ui, st: &mut Study) -> bool {
    let mut changed = false;
    let shaft = &mut st.shaft;
    let length = shaft.length_m();
    ui.label(RichText::new("Material").strong());
    egui::Grid::new("material").num_columns(2).show(ui, |ui| {
        ui.label("Young's modulus (GPa)");
        let mut e = shaft.material.youngs_modulus_pa / 1e9;
        if plain(ui, &mut e, 1.0..=1000.0, 1.0) {
            shaft.material.youngs_modulus_pa = e * 1e9;
            changed = true;
        }
        ui.end_row();
        ui.label("density (kg/m³)");
        changed |= plain(ui, &mut shaft.material.density_kg_m3, 100.0..=25000.0, 10.0);
        ui.end_row();
        ui.label("Poisson's ratio");
        changed |= plain(ui, &mut shaft.material.poisson_ratio, 0.0..=0.49, 0.005);
        ui.end_row();
    });
    ui.add_space(6.0);
    ui.label(RichText::new("Sections, left to right").strong());
    let mut remove = None;
    egui::Grid::new("sections").striped(true).show(ui, |ui| {
        for h in ["#", "length", "outer Ø", "bore Ø", ""] {
            ui.label(RichText::new(h).small());
        }
        ui.end_row();
        let only = shaft.sections.len() == 1;
        for (i, s) in shaft.sections.iter_mut().enumerate() {
            ui.label(format!("{}", i + 1));
            changed |= mm(ui, &mut s.length_m, 100.0);
            changed |= mm(ui, &mut s.outer_diameter_m, 10.0);
            changed |= mm(ui, &mut s.inner_diameter_m, 10.0);
            if !only && ui.small_button("remove").clicked() {
                remove = Some(i);
            }
            ui.end_row();
        }
    });
    if let Some(i) = remove {
        shaft.sections.remove(i);
        changed = true;
    }
    if ui.button("Add a section").clicked() {
        let last = shaft.sections.last().copied().unwrap_or(Section {
            length_m: 0.1,
            outer_diameter_m: FIRST_DIAMETER_M,
            inner_diameter_m: 0.0,
            material: None,
        });
        shaft.sections.push(Section {
            length_m: 0.1,
            ..last
        });
        changed = true;
    }
    ui.add_space(6.0);
    ui.label(RichText::new("Discs and added masses").strong());
    let mut remove = None;
    egui::Grid::new("discs").striped(true).show(ui, |ui| {
        for h in ["at", "mass (kg)", "I transverse (kg·m²)", ""] {
            ui.label(RichText::new(h).small());
        }
        ui.end_row();
        for (i, d) in shaft.discs.iter_mut().enumerate() {
            changed |= mm(ui, &mut d.position_m, length);
            changed |= plain(ui, &mut d.mass_kg, 0.0..=1e5, 0.1);
            changed |= sci(ui, &mut d.transverse_inertia_kg_m2, "");
            if ui.small_button("remove").clicked() {
                remove = Some(i);
            }
            ui.end_row();
        }
    });
    if let Some(i) = remove {
        shaft.discs.remove(i);
        changed = true;
    }
    if ui.button("Add a disc").clicked() {
        shaft.discs.push(Disc {
            position_m: 0.5 * length,
            mass_kg: 1.0,
            polar_inertia_kg_m2: 0.0,
            transverse_inertia_kg_m2: 0.0,
        });
        changed = true;
    }
    ui.add_space(6.0);
    ui.label(RichText::new("Bench supports (none: free-free)").strong());
    changed |= supports(ui, "bench-supports", &mut shaft.supports, length, 4e3);
    ui.add_space(6.0);
    ui.horizontal(|ui| {
        ui.label("pair modes at MAC ≥");
        changed |= plain(ui, &mut st.min_mac, 0.0..=1.0, 0.01);
    });
    if let Err(e) = st.validate() {
        ui.label(RichText::new(e).color(warn()));
    }
    changed
}

fn supports(
    ui: &mut egui::Ui,
    id: &str,
    list: &mut Vec<Support>,
    length: f64,
    stiffness: f64,
) -> bool {
    let mut changed = false;
    let mut remove = None;
    egui::Grid::new(id).striped(true).show(ui, |ui| {
        for h in ["at", "lateral", "against rotation", ""] {
            ui.label(RichText::new(h).small());
        }
        ui.end_row();
        for (i, s) in list.iter_mut().enumerate() {
            changed |= mm(ui, &mut s.position_m, length);
            changed |= sci(ui, &mut s.stiffness_n_per_m, " N/m");
            changed |= sci(ui, &mut s.rotational_stiffness_n_m_per_rad, " N·m/rad");
            if ui.small_button("remove").clicked() {
                remove = Some(i);
            }
            ui.end_row();
        }
    });
    if let Some(i) = remove {
        list.remove(i);
        changed = true;
    }
    let label = if id == "bearings" {
        "Add a bearing"
    } else {
        "Add a support"
    };
    if ui.button(label).clicked() {
        let x = match list.len() {
            0 => 0.1 * length,
            1 => 0.9 * length,
            _ => 0.5 * length,
        };
        list.push(Support::lateral(x, stiffness));
        changed = true;
    }
    changed
}

fn range_editor(
    ui: &mut egui::Ui,
    label: &str,
    value: &mut Option<[f64; 2]>,
    default: [f64; 2],
    unit: &str,
    log: bool,
) -> bool {
    let mut changed = false;
    let mut on = value.is_some();
    ui.horizontal(|ui| {
        if ui.checkbox(&mut on, label).changed() {
            *value = on.then_some(value.unwrap_or(default));
            changed = true;
        }
    });
    if let Some([lo, hi]) = value {
        ui.horizontal(|ui| {
            for v in [lo, hi] {
                changed |= if log {
                    sci(ui, v, unit)
                } else {
                    ui.add(DragValue::new(v).speed(10.0).range(0.0..=1e6).suffix(unit))
                        .changed()
                };
            }
        });
    }
    changed
}

/// Bearings, running speed, orders, sweep range and margin rule; true when something changed.
pub fn service_editor(ui: &mut egui::Ui, st: &mut Study, orders_text: &mut String) -> bool {
    let mut changed = false;
    let length = st.shaft.length_m();
    ui.label(RichText::new("Running speed").strong());
    changed |= range_editor(
        ui,
        "operating range (rpm)",
        &mut st.running_speed_rpm,
        [2900.0, 3000.0],
        " rpm",
        false,
    );
    ui.horizontal(|ui| {
        ui.label("orders");
        let r = ui.add(egui::TextEdit::singleline(orders_text).desired_width(80.0));
        if r.changed() {
            let parsed: Option<Vec<u32>> = orders_text
                .split(',')
                .filter(|x| !x.trim().is_empty())
                .map(|x| {
                    x.trim()
                        .trim_end_matches('×')
                        .parse()
                        .ok()
                        .filter(|&k| k > 0)
                })
                .collect();
            if let Some(o) = parsed.filter(|o| !o.is_empty()) {
                st.orders = o;
                changed = true;
            }
        }
        ui.label(RichText::new("e.g. 1,2").small());
    });
    ui.add_space(6.0);
    ui.label(RichText::new("Bearings in service").strong());
    changed |= supports(ui, "bearings", &mut st.bearings, length, 1e8);
    changed |= range_editor(
        ui,
        "bearing stiffness band",
        &mut st.bearing_band_n_per_m,
        [3e7, 3e8],
        " N/m",
        true,
    );
    let auto = st.sweep_range();
    changed |= range_editor(
        ui,
        "own sweep range (else free to rigid)",
        &mut st.stiffness_range_n_per_m,
        auto,
        " N/m",
        true,
    );
    ui.add_space(6.0);
    ui.label(RichText::new("Separation margin rule").strong());
    ui.label(
        RichText::new("API RP 684 rule (verify against your edition), or set your own.")
            .small()
            .color(warn()),
    );
    let r = &mut st.rule;
    egui::Grid::new("rule").num_columns(2).show(ui, |ui| {
        ui.label("no margin below AF");
        changed |= plain(ui, &mut r.af_threshold, 1.0..=100.0, 0.1);
        ui.end_row();
        ui.label("slope (%)");
        changed |= plain(ui, &mut r.slope_pct, 0.0..=100.0, 0.5);
        ui.end_row();
        ui.label("offset above the range (%)");
        changed |= plain(ui, &mut r.above_offset_pct, 0.0..=100.0, 0.5);
        ui.end_row();
        ui.label("largest below (%)");
        changed |= plain(ui, &mut r.below_cap_pct, 0.0..=100.0, 0.5);
        ui.end_row();
        ui.label("largest above (%)");
        changed |= plain(ui, &mut r.above_cap_pct, 0.0..=100.0, 0.5);
        ui.end_row();
    });
    if ui.button("Reset to the API RP 684 rule").clicked() {
        st.rule = MarginRule::default();
        changed = true;
    }
    if let Err(e) = st.validate() {
        ui.label(RichText::new(e).color(warn()));
    }
    changed
}

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

/// A positive quantity over many decades, shown with an SI prefix ("4.00 kN/m"); typed as a
/// number with or without a prefix ("4000", "4 k", "4e3"). Drag speed follows its size.
fn sci(ui: &mut egui::Ui, v: &mut f64, unit: &str) -> bool {
    let speed = (v.abs() * 0.01).max(1e-9);
    let unit = unit.trim().to_string();
    let unit_p = unit.clone();
    ui.add(
        DragValue::new(v)
            .speed(speed)
            .range(0.0..=1e15)
            .custom_formatter(move |n, _| with_prefix(n, &unit))
            .custom_parser(move |s| parse_prefixed(s, &unit_p)),
    )
    .changed()
}

const PREFIXES: [(f64, &str); 7] = [
    (1e12, "T"),
    (1e9, "G"),
    (1e6, "M"),
    (1e3, "k"),
    (1.0, ""),
    (1e-3, "m"),
    (1e-6, "µ"),
];

/// `n` with three significant figures and an SI prefix on `unit`.
pub(super) fn with_prefix(n: f64, unit: &str) -> String {
    let sep = if unit.is_empty() { "" } else { " " };
    if n == 0.0 || !n.is_finite() {
        return format!("0{sep}{unit}");
    }
    if unit.is_empty() {
        // A prefix without a unit reads as one ("12.3m"): plain scientific notation instead.
        return format!("{n:.3e}");
    }
    let (scale, p) = PREFIXES
        .iter()
        .copied()
        .find(|(s, _)| n.abs() >= *s * 0.999_5)
        .unwrap_or((1e-6, "µ"));
    let x = n / scale;
    let digits = if x.abs() >= 99.95 {
        0
    } else if x.abs() >= 9.995 {
        1
    } else {
        2
    };
    format!("{x:.digits$} {p}{unit}")
}

/// Reads "4.00 kN/m", "4 k", "4e3" or "4000" (the unit is optional).
pub(super) fn parse_prefixed(s: &str, unit: &str) -> Option<f64> {
    let t = s.trim();
    let t = t.strip_suffix(unit).unwrap_or(t).trim();
    if let Ok(v) = t.parse::<f64>() {
        return Some(v);
    }
    let (num, p) = t.split_at(t.char_indices().last()?.0);
    let scale = PREFIXES.iter().find(|(_, q)| *q == p && !q.is_empty())?.0;
    num.trim().parse::<f64>().ok().map(|v| v * scale)
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

#[cfg(test)]
mod tests {
    use super::*;

    /// SI prefixes (BIPM, The International System of Units, 9th ed., 2019, Table 7).
    #[test]
    fn stiffness_reads_with_a_prefix_and_parses_back() {
        assert_eq!(with_prefix(4000.0, "N/m"), "4.00 kN/m");
        assert_eq!(with_prefix(2.5e8, "N/m"), "250 MN/m");
        assert_eq!(with_prefix(0.0, "N·m/rad"), "0 N·m/rad");
        assert_eq!(with_prefix(0.0123, ""), "1.230e-2");
        assert_eq!(parse_prefixed("4.00 kN/m", "N/m"), Some(4000.0));
        assert_eq!(parse_prefixed("250 M", "N/m"), Some(2.5e8));
        assert_eq!(parse_prefixed("4e3", "N/m"), Some(4000.0));
        assert_eq!(parse_prefixed("abc", "N/m"), None);
    }
}

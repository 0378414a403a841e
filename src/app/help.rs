//! The help panel (shortcuts, cautions) and the first-start cautions.

use eframe::egui;

use super::Command;

pub use crate::cautions::CAUTIONS;

/// Keyboard shortcuts: key, action.
pub const SHORTCUTS: [(&str, &str); 12] = [
    ("Right arrow or N", "next station"),
    ("Left arrow or P", "previous station"),
    ("Down / Up arrow", "next / previous hit"),
    ("A", "accept the hit shown"),
    ("R", "reject the hit shown"),
    ("Space", "play / pause the mode animation"),
    ("1 to 9, 0", "switch view (in tab order)"),
    ("Ctrl+S", "save the session"),
    ("Ctrl+O", "open a folder"),
    ("F1", "this help"),
    ("double-click a plot", "reset its zoom"),
    ("drag / scroll", "pan / zoom a plot"),
];

/// The help side panel.
pub fn panel(ui: &mut egui::Ui, commands: &mut Vec<Command>) {
    egui::ScrollArea::vertical().show(ui, |ui| {
        ui.horizontal(|ui| {
            ui.heading("Help");
            if ui.button("Close help").clicked() {
                commands.push(Command::ToggleHelp);
            }
        });
        ui.label(egui::RichText::new("Keyboard").strong());
        egui::Grid::new("shortcuts").striped(true).show(ui, |ui| {
            for (k, a) in SHORTCUTS {
                ui.monospace(k);
                ui.label(a);
                ui.end_row();
            }
        });
        ui.add_space(8.0);
        ui.label(egui::RichText::new("Before you tap").strong());
        for c in CAUTIONS {
            ui.label(format!("• {c}"));
        }
        ui.add_space(8.0);
        ui.label(egui::RichText::new("Conventions").strong());
        ui.label(
            "Accelerance in (m/s²)/N, dB re 1 (m/s²)/N; phase in degrees of response relative \
             to force; coherence 0…1. Frequencies and damping have the exponential window's \
             effect removed. Mode shapes: largest magnitude 1, reference station positive.",
        );
    });
}

/// The cautions window shown until the person confirms them once.
pub fn first_start(ctx: &egui::Context, read: &mut bool) {
    egui::Window::new("Before you start")
        .collapsible(false)
        .resizable(false)
        .anchor(egui::Align2::CENTER_CENTER, [0.0, 0.0])
        .show(ctx, |ui| {
            ui.set_max_width(560.0);
            for c in CAUTIONS {
                ui.label(format!("• {c}"));
                ui.add_space(4.0);
            }
            if ui.button("I have read these cautions").clicked() {
                *read = true;
            }
        });
}

//! Two tests side by side: the open test against another session or WAV set (before and after
//! a repair, or two parts) — modes paired by MAC with the frequency and damping changes, the MAC
//! matrix, and the FRFs overlaid station by station. The other test is analysed and fitted on a
//! thread of its own.

use std::path::PathBuf;
use std::sync::Arc;

use eframe::egui::{self, RichText};
use egui_plot::Line;

use super::plots::{self, accent, bad, warn};
use super::{Command, PathPurpose, TapgridApp, View, ViewCtx};
use crate::modal::{FrfSet, ModalResult};
use crate::pipeline::compare::{Comparison, compare};

/// The other test and the comparison.
pub struct CompareOutcome {
    /// The other test's folder.
    pub path: PathBuf,
    /// Its FRFs.
    pub frfs: FrfSet,
    /// Its modes.
    pub modes: ModalResult,
    /// The comparison of the open test (first) with it (second).
    pub comparison: Comparison,
}

/// The last comparison and the one being made.
pub type CompareState = super::background::Background<CompareOutcome>;

/// The view's choices.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct CompareEdit {
    /// The other test.
    pub path: Option<PathBuf>,
    /// Index into the matched stations for the FRF overlay.
    pub station: usize,
}

/// Analyses and fits the other test: a session with its own setup, a WAV set (which has none)
/// with the open test's — the same rig, before and after.
fn fit_other(
    path: &std::path::Path,
    setup: crate::setup::Setup,
) -> Result<(FrfSet, ModalResult), String> {
    let session = crate::session::Session::is_session(path);
    let t = crate::pipeline::open_test(path, |s| {
        Ok::<_, String>(if session { s } else { setup.clone() })
    })
    .map_err(|e| e.to_string())?;
    let a = crate::pipeline::analyse(&t).map_err(|e| e.to_string())?;
    let set = FrfSet::from_analysis(&a)
        .ok_or_else(|| format!("{}: no station has an accepted hit", path.display()))?;
    let m = crate::pipeline::fit(&a, &t.fit)?;
    Ok((set, m))
}

impl TapgridApp {
    /// Compares when the view is shown and the other test or the open test's fit changed.
    pub(crate) fn poll_compare(&mut self, ctx: &egui::Context) {
        self.compare.collect(ctx);
        if self.settings.view != View::Compare {
            return;
        }
        let Some(path) = self.ui.compare.path.clone() else {
            return;
        };
        let Some(d) = &self.doc else { return };
        let (Some(frfs), Some(m)) = (&d.frfs, &d.modal) else {
            return;
        };
        let key = format!("{}|{:p}", path.display(), Arc::as_ptr(m));
        if !self.compare.wants(&key) {
            return;
        }
        let (frfs, m, setup) = (frfs.clone(), m.clone(), d.setup.clone());
        self.compare.start_for(key, "tapgrid-compare", move || {
            let (other, om) = fit_other(&path, setup)?;
            let comparison = compare(&frfs, &m, &other, &om, 0.6);
            Ok(CompareOutcome {
                path,
                frfs: other,
                modes: om,
                comparison,
            })
        });
    }
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let mut cmds = Vec::new();
    let Some(doc) = app.doc else {
        return;
    };
    let outcome = app.compare.result.as_ref().map(|r| r.1.clone());
    egui::Panel::left("compare-side")
        .default_size(520.0)
        .show(ui, |ui| {
            egui::ScrollArea::vertical().show(ui, |ui| {
                ui.heading("Two tests");
                ui.label(
                    "The open test (first) against another session or WAV set of the same part \
                     (before and after a repair) or of a twin part (second).",
                );
                if ui.button("Compare with another test…").clicked() {
                    cmds.push(Command::AskPath(PathPurpose::LoadCompare));
                }
                match (&app.ui.compare.path, &outcome) {
                    (None, _) => {}
                    (Some(p), None) => {
                        ui.label(format!("Analysing {}…", p.display()));
                    }
                    (_, Some(Err(e))) => {
                        ui.label(RichText::new(e).color(bad()));
                    }
                    (_, Some(Ok(o))) => table(ui, o),
                }
            });
        });
    let Some(Ok(o)) = outcome else {
        for c in cmds {
            app.push(c);
        }
        return;
    };
    egui::CentralPanel::default().show(ui, |ui| {
        let c = &o.comparison;
        if c.stations.is_empty() {
            ui.label("No station of one test lies at a station of the other.");
            return;
        }
        let k = app.ui.compare.station.min(c.stations.len() - 1);
        let st = c.stations[k];
        ui.horizontal(|ui| {
            ui.label("FRFs at");
            egui::ComboBox::from_id_salt("compare-station")
                .selected_text(format!(
                    "station {} / {} ({:.3} m)",
                    st.a_station, st.b_station, st.position_m
                ))
                .show_ui(ui, |ui| {
                    for (i, s) in c.stations.iter().enumerate() {
                        ui.selectable_value(
                            &mut app.ui.compare.station,
                            i,
                            format!(
                                "station {} / {} ({:.3} m){}",
                                s.a_station,
                                s.b_station,
                                s.position_m,
                                s.median_db
                                    .map_or(String::new(), |d| format!(" — {d:.1} dB"))
                            ),
                        );
                    }
                });
        });
        let (Some(frfs), Some(ia), Some(ib)) = (
            doc.frfs.as_ref(),
            doc.frfs
                .as_ref()
                .and_then(|f| f.stations.iter().position(|&s| s == st.a_station)),
            o.frfs.stations.iter().position(|&s| s == st.b_station),
        ) else {
            return;
        };
        let curve = |set: &FrfSet, i: usize| -> Vec<[f64; 2]> {
            set.freq_hz
                .iter()
                .zip(&set.h[i])
                .map(|(f, h)| [*f, plots::db(h.norm())])
                .collect()
        };
        plots::plot("compare-frf")
            .height(ui.available_height() - 30.0)
            .x_axis_label("frequency (Hz)")
            .y_axis_label("|FRF| (dB)")
            .legend(egui_plot::Legend::default())
            .show(ui, |p| {
                p.line(Line::new("first (open test)", curve(frfs, ia)).color(accent()));
                p.line(
                    Line::new("second", curve(&o.frfs, ib))
                        .color(warn())
                        .style(egui_plot::LineStyle::dashed_dense()),
                );
            });
    });
    for c in cmds {
        app.push(c);
    }
}

fn table(ui: &mut egui::Ui, o: &CompareOutcome) {
    let c = &o.comparison;
    ui.label(RichText::new(o.path.display().to_string()).small());
    egui::Grid::new("compare-pairs")
        .striped(true)
        .num_columns(7)
        .show(ui, |ui| {
            for h in [
                "#",
                "first (Hz)",
                "second (Hz)",
                "Δf (%)",
                "ζ first / second (%)",
                "Δζ (%)",
                "MAC",
            ] {
                ui.label(RichText::new(h).strong());
            }
            ui.end_row();
            for p in &c.pairs {
                ui.label(format!("{}", p.a + 1));
                ui.label(format!("{:.2}", p.a_hz));
                ui.label(format!("{:.2}", p.b_hz));
                ui.label(format!("{:+.3}", p.difference_pct));
                let z =
                    |v: Option<f64>| v.map_or("—".to_string(), |z| format!("{:.3}", 100.0 * z));
                ui.label(format!("{} / {}", z(p.a_damping), z(p.b_damping)));
                ui.label(
                    p.damping_change_pct
                        .map_or("—".to_string(), |d| format!("{d:+.0}")),
                );
                ui.label(format!("{:.3}", p.mac));
                ui.end_row();
            }
        });
    if !c.unpaired_a.is_empty() || !c.unpaired_b.is_empty() {
        ui.label(
            RichText::new(format!(
                "Unpaired: first test's modes {:?}, second's {:?}",
                c.unpaired_a.iter().map(|i| i + 1).collect::<Vec<_>>(),
                c.unpaired_b.iter().map(|i| i + 1).collect::<Vec<_>>()
            ))
            .color(warn()),
        );
    }
    for w in &c.warnings {
        ui.label(RichText::new(w).color(warn()).small());
    }
    ui.separator();
    ui.label(RichText::new("MAC (rows: first test, columns: second)").strong());
    let rows: Vec<String> = (1..=c.mac.len()).map(|k| k.to_string()).collect();
    let cols: Vec<String> = (1..=o.modes.modes.len()).map(|k| k.to_string()).collect();
    let _ = plots::heat_map(ui, &c.mac, &rows, &cols, (None, None));
}

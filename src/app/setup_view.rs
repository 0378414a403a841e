//! Test setup: part, stations, layout, channels, trigger, record, windows, band. Any change to the
//! analysis settings re-runs the analysis in the background once the control is let go.

use eframe::egui::{self, DragValue, RichText};

use super::plots::{bad, warn};
use super::{Command, SetupEdit, ViewCtx};
use crate::setup::{AcCoupling, Estimator, Layout, Setup, Slope, TriggerLevel};

fn optional(
    ui: &mut egui::Ui,
    v: &mut Option<f64>,
    auto_text: &str,
    default: f64,
    suffix: &str,
    speed: f64,
) {
    let mut auto = v.is_none();
    if ui.checkbox(&mut auto, auto_text).changed() {
        *v = if auto { None } else { Some(default) };
    }
    if let Some(x) = v {
        ui.add(
            DragValue::new(x)
                .speed(speed)
                .range(0.0..=f64::MAX)
                .suffix(suffix),
        );
    }
}

/// Draws the view.
pub fn show(ui: &mut egui::Ui, app: &mut ViewCtx) {
    let Some(doc) = app.doc else {
        return;
    };
    // The view edits a copy and sends it back; the document changes only through the command.
    let original = SetupEdit {
        setup: doc.setup.clone(),
        part: doc.part.clone(),
        labels: doc.labels.clone(),
        positions_m: doc.data.stations.iter().map(|s| s.position_m).collect(),
        analyse: false,
    };
    let mut draft = original.clone();
    egui::ScrollArea::vertical().show(ui, |ui| {
        ui.heading("Test setup");
        if doc.read_only {
            ui.label(RichText::new("The bundled demo is read-only: changes re-run the analysis but are saved only with Save as.").color(warn()));
        }
        if let Some(e) = &doc.analysis_error {
            ui.label(RichText::new(format!("Analysis failed: {e}")).color(bad()));
        }
        super::plan_panel::show(ui, app);
        report_details(ui, app, doc);
        ui.columns(2, |cols| {
            let ui = &mut cols[0];
            ui.group(|ui| {
                ui.label(RichText::new("Part").strong());
                egui::Grid::new("part").num_columns(2).show(ui, |ui| {
                    let l = ui.label("name");
                    ui.text_edit_singleline(&mut draft.part.name).labelled_by(l.id);
                    ui.end_row();
                    ui.label("notes");
                    ui.text_edit_multiline(&mut draft.part.notes);
                    ui.end_row();
                });
            });
            ui.group(|ui| {
                let s = &mut draft.setup;
                ui.label(RichText::new("Layout and channels").strong());
                ui.horizontal(|ui| {
                    ui.radio_value(&mut s.layout, Layout::Hammer, "roving hammer (A = force, B = fixed accelerometer)");
                });
                ui.horizontal(|ui| {
                    ui.radio_value(&mut s.layout, Layout::Sensor, "roving accelerometer (A = fixed reference, B = roving)");
                });
                let qa = s.layout.channel_a_quantity();
                egui::Grid::new("channels").num_columns(3).show(ui, |ui| {
                    ui.label("");
                    ui.label("input index");
                    ui.label("sensitivity");
                    ui.end_row();
                    ui.label("channel A");
                    ui.add(DragValue::new(&mut s.channel_a.index).range(0..=63));
                    ui.add(DragValue::new(&mut s.channel_a.sensitivity.mv_per_unit).speed(0.01).range(1e-6..=1e6).suffix(format!(" mV/{}", qa.si_unit())));
                    ui.end_row();
                    ui.label("channel B");
                    ui.add(DragValue::new(&mut s.channel_b.index).range(0..=63));
                    ui.add(DragValue::new(&mut s.channel_b.sensitivity.mv_per_unit).speed(0.01).range(1e-6..=1e6).suffix(" mV/(m/s²)"));
                    ui.end_row();
                    ui.label("full scale");
                    ui.add(DragValue::new(&mut s.full_scale_volts).speed(0.01).range(1e-3..=100.0).suffix(" V"));
                    ui.label("volts at digital ±1.0");
                    ui.end_row();
                });
            });
            ui.group(|ui| {
                ui.label(RichText::new("Stations").strong());
                let stations: Vec<u32> = doc.data.stations.iter().map(|s| s.station).collect();
                ui.horizontal(|ui| {
                    ui.label("reference station");
                    let text = draft.setup.reference_station.map_or("not set".into(), |r| format!("station {r}"));
                    egui::ComboBox::from_id_salt("reference").selected_text(text).show_ui(ui, |ui| {
                        ui.selectable_value(&mut draft.setup.reference_station, None, "not set");
                        for &st in &stations {
                            ui.selectable_value(&mut draft.setup.reference_station, Some(st), format!("station {st}"));
                        }
                    });
                });
                egui::Grid::new("stations").striped(true).num_columns(3).show(ui, |ui| {
                    ui.label("station");
                    ui.label("position");
                    ui.label("label");
                    ui.end_row();
                    for (&st, x) in stations.iter().zip(&mut draft.positions_m) {
                        ui.label(st.to_string());
                        ui.add(DragValue::new(x).speed(0.001).range(-100.0..=100.0).suffix(" m"));
                        let mut label = draft.labels.get(&st).cloned().unwrap_or_default();
                        if ui.add(egui::TextEdit::singleline(&mut label).desired_width(140.0)).changed() {
                            if label.is_empty() {
                                draft.labels.remove(&st);
                            } else {
                                draft.labels.insert(st, label);
                            }
                        }
                        ui.end_row();
                    }
                });
            });
            let ui = &mut cols[1];
            let s = &mut draft.setup;
            ui.group(|ui| {
                ui.label(RichText::new("Trigger and record").strong());
                egui::Grid::new("trigger").num_columns(2).show(ui, |ui| {
                    ui.label("level");
                    ui.horizontal(|ui| {
                        let mut by_noise = matches!(s.trigger.level, TriggerLevel::NoiseMultiple(_));
                        if ui.checkbox(&mut by_noise, "relative to noise").changed() {
                            s.trigger.level = if by_noise { TriggerLevel::NoiseMultiple(20.0) } else { TriggerLevel::FractionOfRange(0.02) };
                        }
                        match &mut s.trigger.level {
                            TriggerLevel::FractionOfRange(v) => {
                                let mut pct = *v * 100.0;
                                if ui.add(DragValue::new(&mut pct).speed(0.1).range(0.01..=90.0).suffix(" % of range")).changed() {
                                    *v = pct / 100.0;
                                }
                            }
                            TriggerLevel::NoiseMultiple(v) => {
                                ui.add(DragValue::new(v).speed(0.5).range(1.0..=1e4).suffix(" × noise rms"));
                            }
                        }
                    });
                    ui.end_row();
                    ui.label("slope");
                    ui.horizontal(|ui| {
                        ui.radio_value(&mut s.trigger.slope, Slope::Rising, "rising");
                        ui.radio_value(&mut s.trigger.slope, Slope::Falling, "falling");
                    });
                    ui.end_row();
                    ui.label("pretrigger");
                    let mut pct = s.trigger.pretrigger_fraction * 100.0;
                    if ui.add(DragValue::new(&mut pct).speed(0.5).range(0.0..=50.0).suffix(" % of record")).changed() {
                        s.trigger.pretrigger_fraction = pct / 100.0;
                    }
                    ui.end_row();
                    ui.label("record length");
                    ui.horizontal(|ui| optional(ui, &mut s.trigger.record_length_s, "auto (power of 2, ≥ 1 s)", 1.0, " s", 0.01));
                    ui.end_row();
                    ui.label("hold-off");
                    ui.horizontal(|ui| optional(ui, &mut s.trigger.holdoff_s, "auto (rest of record)", 0.5, " s", 0.01));
                    ui.end_row();
                });
            });
            ui.group(|ui| {
                ui.label(RichText::new("Windows").strong());
                egui::Grid::new("windows").num_columns(2).show(ui, |ui| {
                    ui.label("force window, unity part");
                    ui.horizontal(|ui| optional(ui, &mut s.windows.force_unity_s, "auto (4 × pulse)", 0.005, " s", 0.0005));
                    ui.end_row();
                    ui.label("force window, taper");
                    ui.horizontal(|ui| optional(ui, &mut s.windows.force_taper_s, "auto (1 × pulse)", 0.001, " s", 0.0001));
                    ui.end_row();
                    ui.label("exponential at record end");
                    let mut pct = s.windows.exponential_end * 100.0;
                    if ui.add(DragValue::new(&mut pct).speed(0.1).range(0.01..=100.0).suffix(" % (100 = none)")).changed() {
                        s.windows.exponential_end = pct / 100.0;
                    }
                    ui.end_row();
                    ui.label("carried-over ringing");
                    ui.checkbox(&mut s.remove_carryover, "model and remove");
                    ui.end_row();
                    ui.label("AC coupling");
                    ui.horizontal(|ui| {
                        let mut kind = match s.ac_coupling {
                            AcCoupling::Auto => 0,
                            AcCoupling::None => 1,
                            AcCoupling::CornerHz(_) => 2,
                        };
                        let old = kind;
                        ui.radio_value(&mut kind, 0, "find from hammer tail");
                        ui.radio_value(&mut kind, 1, "leave");
                        ui.radio_value(&mut kind, 2, "known corner");
                        if kind != old {
                            s.ac_coupling = match kind {
                                0 => AcCoupling::Auto,
                                1 => AcCoupling::None,
                                _ => AcCoupling::CornerHz(1.0),
                            };
                        }
                        if let AcCoupling::CornerHz(f) = &mut s.ac_coupling {
                            ui.add(DragValue::new(f).speed(0.05).range(0.01..=100.0).suffix(" Hz"));
                        }
                    });
                    ui.end_row();
                });
            });
            ui.group(|ui| {
                ui.label(RichText::new("Band and estimator").strong());
                egui::Grid::new("band").num_columns(2).show(ui, |ui| {
                    ui.label("analysis band");
                    ui.horizontal(|ui| {
                        let mut auto = s.band_hz.is_none();
                        if ui.checkbox(&mut auto, "auto (10 Hz … min(5 kHz, 0.45 fs))").changed() {
                            s.band_hz = if auto { None } else { Some([10.0, 3000.0]) };
                        }
                        if let Some(b) = &mut s.band_hz {
                            ui.add(DragValue::new(&mut b[0]).speed(1.0).range(0.0..=1e6).suffix(" Hz"));
                            ui.label("to");
                            ui.add(DragValue::new(&mut b[1]).speed(1.0).range(0.0..=1e6).suffix(" Hz"));
                        }
                    });
                    ui.end_row();
                    ui.label("estimator");
                    ui.horizontal(|ui| {
                        ui.radio_value(&mut s.estimator, Estimator::H1, "H1 (noise on response)");
                        ui.radio_value(&mut s.estimator, Estimator::H2, "H2 (noise on force)");
                        ui.radio_value(&mut s.estimator, Estimator::Hv, "Hv");
                    });
                    ui.end_row();
                });
            });
            ui.group(|ui| {
                ui.label(RichText::new("Hit checks").strong());
                let q = &mut s.quality;
                egui::Grid::new("quality").num_columns(2).show(ui, |ui| {
                    let pct = |ui: &mut egui::Ui, label: &str, v: &mut f64, hi: f64| {
                        ui.label(label);
                        let mut p = *v * 100.0;
                        if ui.add(DragValue::new(&mut p).speed(0.1).range(0.0..=hi).suffix(" %")).changed() {
                            *v = p / 100.0;
                        }
                        ui.end_row();
                    };
                    pct(ui, "overload at", &mut q.overload_fraction, 100.0);
                    pct(ui, "weak below", &mut q.weak_fraction, 100.0);
                    pct(ui, "double hit above (of peak)", &mut q.double_hit_fraction, 100.0);
                    pct(ui, "outlier misfit above", &mut q.outlier_max_residual, 100.0);
                    ui.label("force roll-off limit");
                    ui.add(DragValue::new(&mut q.rolloff_db).speed(0.2).range(1.0..=80.0).suffix(" dB"));
                    ui.end_row();
                });
            });
        });
    });
    // Drags re-run once released, so a long drag does not queue a run per frame; an invalid
    // setup waits until it is valid.
    if draft.setup != original.setup || draft.positions_m != original.positions_m {
        app.ui.setup_pending = true;
    }
    let invalid = validate(&draft.setup);
    let analyse = app.ui.setup_pending && !ui.ctx().egui_is_using_pointer() && invalid.is_none();
    if analyse {
        app.ui.setup_pending = false;
    }
    if draft != original {
        draft.analyse = analyse;
        app.push(Command::EditSetup(Box::new(draft)));
    } else if analyse {
        app.push(Command::Reanalyse);
    }
    if let Some(e) = invalid {
        ui.label(RichText::new(format!("Setup not valid: {e}")).color(bad()));
    }
}

/// The report's test record: who, where, when, with what — kept with the session.
fn report_details(ui: &mut egui::Ui, app: &mut ViewCtx, doc: &super::Document) {
    let mut info = doc.report.clone();
    egui::CollapsingHeader::new(RichText::new("Report details").strong())
        .id_salt("report-details")
        .default_open(false)
        .show(ui, |ui| {
            egui::Grid::new("report-record")
                .num_columns(4)
                .show(ui, |ui| {
                    let field = |ui: &mut egui::Ui, label: &str, v: &mut String| {
                        let l = ui.label(label);
                        ui.add(egui::TextEdit::singleline(v).desired_width(260.0))
                            .labelled_by(l.id);
                    };
                    field(ui, "tested by", &mut info.operator);
                    field(ui, "reviewed by", &mut info.reviewer);
                    ui.end_row();
                    field(ui, "site", &mut info.site);
                    field(ui, "test date", &mut info.test_date);
                    ui.end_row();
                    field(ui, "part held by", &mut info.support);
                    field(ui, "conditioning", &mut info.conditioning);
                    ui.end_row();
                });
            ui.label("Instruments");
            let mut remove = None;
            egui::Grid::new("report-instruments")
                .num_columns(6)
                .striped(true)
                .show(ui, |ui| {
                    for h in [
                        "role",
                        "make and model",
                        "serial",
                        "calibrated",
                        "sensitivity",
                        "",
                    ] {
                        ui.label(RichText::new(h).strong());
                    }
                    ui.end_row();
                    for (k, x) in info.instruments.iter_mut().enumerate() {
                        for v in [
                            &mut x.role,
                            &mut x.model,
                            &mut x.serial,
                            &mut x.calibrated,
                            &mut x.sensitivity,
                        ] {
                            ui.add(egui::TextEdit::singleline(v).desired_width(150.0));
                        }
                        if ui.button("Remove").clicked() {
                            remove = Some(k);
                        }
                        ui.end_row();
                    }
                });
            if let Some(k) = remove {
                info.instruments.remove(k);
            }
            if ui.button("Add an instrument").clicked() {
                info.instruments.push(crate::session::Instrument::default());
            }
            ui.label(
                RichText::new(
                    "Kept with the session; the report (HTML or PDF) prints them with a sign-off \
                     block.",
                )
                .small(),
            );
        });
    if info != doc.report {
        app.push(Command::EditReportInfo(Box::new(info)));
    }
}

fn validate(s: &Setup) -> Option<String> {
    s.validate().err()
}

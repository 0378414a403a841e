//! Commands carried out after the frame: navigation, verdicts, pole picks, files.

use super::*;

impl TapgridApp {
    pub(super) fn stations(&self) -> Vec<u32> {
        self.doc
            .as_ref()
            .map(|d| d.data.stations.iter().map(|s| s.station).collect())
            .unwrap_or_default()
    }

    /// Carries out one command.
    pub fn apply(&mut self, ctx: &egui::Context, c: Command) {
        match c {
            Command::Open(p) => self.worker.send(Job::Open(p)),
            Command::Save => self.save(),
            Command::SaveAs(dir) => self.save_as(dir),
            Command::AskPath(purpose) => {
                let text = match purpose {
                    PathPurpose::WriteModel => std::env::current_dir()
                        .unwrap_or_default()
                        .join("shaft.json")
                        .display()
                        .to_string(),
                    PathPurpose::WriteReport => {
                        let pdf = std::mem::take(&mut self.ui.report_pdf);
                        self.doc
                            .as_ref()
                            .map(|d| {
                                let p = report_default_path(d);
                                if pdf { p.with_extension("pdf") } else { p }
                                    .display()
                                    .to_string()
                            })
                            .unwrap_or_default()
                    }
                    PathPurpose::SaveAs => self
                        .doc
                        .as_ref()
                        .map(|d| {
                            let name = d
                                .path
                                .file_name()
                                .map(|n| n.to_string_lossy().into_owned())
                                .unwrap_or_else(|| "session".into());
                            std::env::current_dir()
                                .unwrap_or_default()
                                .join(format!("{name}-session"))
                                .display()
                                .to_string()
                        })
                        .unwrap_or_default(),
                    _ => std::env::current_dir()
                        .unwrap_or_default()
                        .display()
                        .to_string(),
                };
                self.dialog = Some(PathDialog {
                    purpose,
                    text,
                    listing: None,
                });
            }
            Command::Show(v) => self.settings.view = v,
            Command::GoStation(s) => {
                self.ui.current_station = Some(s);
                self.ui.current_hit = 0;
            }
            Command::NextStation | Command::PrevStation => {
                let st = self.stations();
                if st.is_empty() {
                    return;
                }
                let i = self
                    .ui
                    .current_station
                    .and_then(|c| st.iter().position(|&s| s == c))
                    .unwrap_or(0);
                let j = if c == Command::NextStation {
                    (i + 1).min(st.len() - 1)
                } else {
                    i.saturating_sub(1)
                };
                self.ui.current_station = Some(st[j]);
                self.ui.current_hit = 0;
            }
            Command::NextHit | Command::PrevHit => {
                let n = self
                    .ui
                    .current_station
                    .and_then(|s| self.doc.as_ref()?.station_analysis(s))
                    .map_or(0, |s| s.result.hits.len());
                if n == 0 {
                    return;
                }
                self.ui.current_hit = if c == Command::NextHit {
                    (self.ui.current_hit + 1).min(n - 1)
                } else {
                    self.ui.current_hit.saturating_sub(1)
                };
            }
            Command::SelectHit(h) => self.ui.current_hit = h,
            Command::SetVerdict {
                station,
                hit,
                accept,
            } => self.set_verdict(station, hit, accept),
            Command::VerdictCurrent(accept) => {
                if let Some(st) = self.ui.current_station {
                    self.set_verdict(st, self.ui.current_hit, Some(accept));
                }
            }
            Command::UseLayout(layout) => {
                if let Some(d) = &mut self.doc {
                    d.setup.layout = layout;
                    d.dirty = true;
                    self.note(
                        format!("analysing in the {} layout", layout_word(layout)),
                        false,
                    );
                }
                self.request_analysis();
            }
            Command::Reanalyse => {
                if let Some(d) = &mut self.doc {
                    d.dirty = true;
                }
                self.request_analysis();
            }
            Command::TogglePole {
                frequency_hz,
                tolerance_hz,
            } => self.toggle_pole(frequency_hz, tolerance_hz),
            Command::AutoPoles => {
                if let Some(d) = &mut self.doc {
                    d.picked = None;
                    d.modal_settings.selection = Selection::Auto;
                    d.dirty = true;
                }
                self.request_fit();
            }
            Command::SetFitBand(b) => {
                let mut kept = None;
                if let Some(d) = &mut self.doc {
                    // A person's choice survives a band change for the modes still inside it.
                    let chosen: Option<Vec<f64>> = match (&d.picked, &d.modal_settings.selection) {
                        (Some(p), _) => d.modal.as_ref().and_then(|m| {
                            let st = m.stabilization.as_ref()?;
                            Some(
                                p.iter()
                                    .filter_map(|&i| st.poles.get(i).map(|x| x.frequency_hz))
                                    .collect(),
                            )
                        }),
                        (None, Selection::Near(list)) => Some(list.clone()),
                        _ => None,
                    };
                    d.modal_settings.band_hz = b;
                    d.picked = None;
                    d.modal_settings.selection = match chosen {
                        Some(list) => {
                            let inside: Vec<f64> = list
                                .iter()
                                .copied()
                                .filter(|f| b.is_none_or(|[lo, hi]| *f >= lo && *f <= hi))
                                .collect();
                            kept = Some((inside.len(), list.len() - inside.len()));
                            if inside.is_empty() {
                                Selection::Auto
                            } else {
                                Selection::Near(inside)
                            }
                        }
                        None => Selection::Auto,
                    };
                    d.dirty = true;
                }
                if let Some((n, dropped)) = kept {
                    let text = if n == 0 {
                        "none of your chosen modes is inside the new band: back to the automatic \
                         choice"
                            .to_string()
                    } else if dropped > 0 {
                        format!(
                            "kept your {n} chosen modes inside the new band; {dropped} outside it \
                             dropped"
                        )
                    } else {
                        format!("kept your {n} chosen modes")
                    };
                    self.note(text, false);
                }
                self.request_fit();
            }
            Command::TogglePlay => self.ui.playing = !self.ui.playing,
            Command::ToggleHelp => self.ui.show_help = !self.ui.show_help,
            Command::SelectMode(m) => {
                self.ui.selected_mode = m;
                self.ui.selected_model_mode = None;
            }
            Command::SelectModelMode(m) => self.ui.selected_model_mode = Some(m),
            Command::EditSetup(e) => self.edit_setup(*e),
            Command::EditStudy(st) => {
                if let Some(d) = &mut self.doc {
                    d.study = Some(*st);
                    d.dirty = true;
                }
                self.request_study();
            }
            Command::StartCapture => self.start_capture(),
            Command::CaptureControl(c) => {
                if let Some(h) = &self.capture.handle {
                    let _ = h.controls.send(c);
                }
            }
            Command::ListDevices => self.worker.send(Job::ListDevices),
            Command::LoadModel(p) => self.load_model(&p),
            Command::LoadRotor(p) => {
                if self.doc.is_some() {
                    self.io.send(Job::ReadRotor(p));
                }
            }
            Command::LoadRun(p) => {
                self.ui.run.path = Some(p);
                self.settings.view = View::Run;
            }
            Command::RecordRun => self.start_run_record(),
            Command::EditReportInfo(info) => {
                let capturing = self.capture.handle.is_some();
                if let Some(d) = &mut self.doc {
                    d.report = *info;
                    d.dirty = true;
                    // Kept at once in a writable session (no analysis follows this edit).
                    if !d.read_only
                        && !capturing
                        && let Some(s) = d.session_to_write()
                    {
                        self.io.send(Job::SaveSession {
                            session: Box::new(s),
                            announce: false,
                        });
                    }
                }
            }
            Command::LoadCompare(p) => {
                self.ui.compare = super::compare_view::CompareEdit {
                    path: Some(p),
                    station: 0,
                };
                self.settings.view = View::Compare;
            }
            Command::StopRecordRun => {
                if let Some(h) = &self.recording.handle {
                    h.stop.store(true, std::sync::atomic::Ordering::Relaxed);
                    self.recording.message = Some(("Saving the run…".into(), false));
                }
            }
            Command::ClearRotor => {
                if let Some(st) = self.doc.as_mut().and_then(|d| d.study.as_mut()) {
                    st.rotor = None;
                }
                if let Some(d) = &mut self.doc {
                    d.dirty = true;
                }
            }
            Command::WriteModel(p) => self.write_model(&p),
            Command::WriteReport(p) => self.write_report(&p),
            Command::NewModel => {
                if let Some(d) = &mut self.doc {
                    d.study = Some(model_edit::first_model(d));
                    d.dirty = true;
                }
                self.request_study();
            }
        }
        ctx.request_repaint();
    }

    fn edit_setup(&mut self, e: SetupEdit) {
        let Some(d) = &mut self.doc else {
            return;
        };
        if e.positions_m.len() != d.data.stations.len() {
            // The recordings changed under the edit (a capture added a station): drop it.
            return;
        }
        for (src, x) in d.data.stations.iter_mut().zip(&e.positions_m) {
            src.position_m = *x;
        }
        d.setup = e.setup;
        d.part = e.part;
        d.labels = e.labels;
        d.dirty = true;
        if e.analyse {
            self.request_analysis();
        }
    }

    pub(super) fn set_verdict(&mut self, station: u32, hit: usize, accept: Option<bool>) {
        let Some(d) = &mut self.doc else {
            return;
        };
        let Some(i) = d.station_index(station) else {
            return;
        };
        let known = d
            .station_analysis(station)
            .is_some_and(|s| hit < s.result.hits.len());
        if !known {
            return;
        }
        let ov = &mut d.data.stations[i].overrides;
        match accept {
            Some(v) => {
                ov.insert(hit, v);
            }
            None => {
                ov.remove(&hit);
            }
        }
        d.dirty = true;
        self.request_analysis();
    }

    pub(super) fn toggle_pole(&mut self, f: f64, tol: f64) {
        let Some(d) = &mut self.doc else {
            return;
        };
        let Some(m) = d.modal.clone() else {
            return;
        };
        let Some(stab) = &m.stabilization else {
            self.note(
                "no stabilization diagram (peak method): nothing to pick",
                true,
            );
            return;
        };
        let mut caution = None;
        let mut picked = d
            .picked
            .clone()
            .unwrap_or_else(|| fit_view::poles_of_modes(&m, stab));
        if let Some(k) = picked
            .iter()
            .position(|&p| (stab.poles[p].frequency_hz - f).abs() <= tol)
        {
            picked.remove(k);
        } else if let Some(p) = fit_view::best_pole_near(stab, f, tol) {
            use crate::estimate::lscf::PoleStatus;
            let pole = &stab.poles[p];
            match pole.status {
                PoleStatus::New => {
                    self.note(
                        format!(
                            "no stable pole within {tol:.1} Hz of {f:.1} Hz: nothing taken (a mode \
                             shows as a column of poles repeating over the orders)"
                        ),
                        true,
                    );
                    return;
                }
                PoleStatus::Frequency | PoleStatus::FrequencyDamping => {
                    caution = Some((
                        format!(
                            "took the pole at {:.1} Hz, which is not fully stable (its {} changes \
                         between orders): check its shape and the synthesized FRF",
                            pole.frequency_hz,
                            if pole.status == PoleStatus::Frequency {
                                "damping and shape"
                            } else {
                                "shape"
                            }
                        ),
                        false,
                    ))
                }
                PoleStatus::FrequencyDampingShape => {}
            }
            picked.push(p);
        } else {
            self.note(format!("no pole within {tol:.1} Hz of {f:.1} Hz"), true);
            return;
        }
        d.picked = Some(picked);
        if let Some((text, error)) = caution {
            self.note(text, error);
        }
        self.request_fit();
    }

    pub(super) fn load_model(&mut self, path: &Path) {
        if self.doc.is_some() {
            self.io.send(Job::ReadShaft(path.to_path_buf()));
        }
    }

    pub(super) fn write_report(&mut self, path: &Path) {
        let Some(d) = &self.doc else {
            return;
        };
        let Some(analysis) = d.analysis.clone() else {
            self.note(
                "the report needs the analysis, which has not finished",
                true,
            );
            return;
        };
        let job = super::worker::ReportJob {
            path: path.to_path_buf(),
            part: d.part.clone(),
            source: d.path.clone(),
            analysis,
            modes: d.modal.clone(),
            study: d.study.clone().zip(d.study_result.clone()),
            info: d.report.clone(),
            runs: d.session.as_ref().map_or_else(Vec::new, |s| {
                crate::report::runs::session_runs(&d.path, &s.manifest.runs)
            }),
        };
        self.io.send(Job::WriteReport(Box::new(job)));
    }

    pub(super) fn write_model(&mut self, path: &Path) {
        let Some(st) = self.doc.as_ref().and_then(|d| d.study.as_ref()) else {
            return;
        };
        match serde_json::to_string_pretty(&st.shaft) {
            Ok(t) => self.io.send(Job::WriteFile {
                path: path.to_path_buf(),
                bytes: t.into_bytes(),
                what: "shaft model",
            }),
            Err(e) => self.note(format!("cannot write the model: {e}"), true),
        }
    }

    pub(super) fn save(&mut self) {
        let Some(d) = &mut self.doc else {
            return;
        };
        if d.read_only || d.session.is_none() {
            let why = if let Some(who) = &d.locked_by {
                format!("the session is in use by {who}: save a copy in a new folder")
            } else if d.session.is_none() {
                "a WAV set is saved as a new session: choose its folder".to_string()
            } else {
                "the demo is read-only: save a copy in a new folder".to_string()
            };
            self.note(why, false);
            self.commands.push(Command::AskPath(PathPurpose::SaveAs));
            return;
        }
        if self.capture.handle.is_some() && self.capture_dir.as_deref() == Some(d.path.as_path()) {
            self.note(
                "capture is writing this session: your changes are saved when it stops",
                false,
            );
            return;
        }
        if let Some(s) = d.session_to_write() {
            self.io.send(Job::SaveSession {
                session: Box::new(s),
                announce: true,
            });
        }
    }

    pub(super) fn save_as(&mut self, dir: PathBuf) {
        let Some(d) = &self.doc else {
            return;
        };
        if let Some(s) = d.session_to_write() {
            self.worker.send(Job::SaveAs {
                session: Box::new(s),
                dir,
            });
        } else {
            let hits = d
                .analysis
                .as_ref()
                .map(|a| crate::session::saved_hits(a))
                .unwrap_or_default();
            self.worker.send(Job::CreateSession {
                wavset: d.data.origin.clone(),
                dir,
                setup: d.setup.clone(),
                part: d.part.clone(),
                hits,
                model: d.study.clone().map(Box::new),
            });
        }
    }
}

fn layout_word(l: crate::setup::Layout) -> &'static str {
    match l {
        crate::setup::Layout::Hammer => "roving-hammer",
        crate::setup::Layout::Sensor => "roving-accelerometer",
    }
}
